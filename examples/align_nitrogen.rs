//! Build a scenario in code, run it and print the peak field-free alignment.
//!
//! cargo run --release --example align_nitrogen

use kicktrain::field::Pulse;
use kicktrain::scenario::{Scenario, Window};
use kicktrain::simulate::simulate;

fn main() -> Result<(), kicktrain::Error> {
    // Nitrogen at 300 K, one 60 fs Gaussian pulse at 4e13 W/cm² centred at t = 0.
    let window = Window { start_ps: 0.0, stop_ps: 10.0, step_fs: 10.0 };
    let scenario = Scenario::new("N2", 300.0, vec![Pulse::gaussian(0.0, 60.0, 4e13)], window)?;
    let sim = simulate(&scenario)?;
    let trace = &sim.result.trace;
    let after = scenario.field.last_pulse_end_ps().unwrap_or(0.0);
    let peak = trace.max_after(&trace.cos2, after).expect("window extends past the pulse");
    println!("kick strength P = {:.2}", scenario.field.pulses[0].kick_strength(scenario.molecule.delta_alpha_a3()));
    println!("peak <cos^2 theta> = {:.4} at {:.3} ps (isotropic 1/3)", peak.value, peak.t_ps);
    println!("permanent alignment = {:.4}", sim.result.permanent_cos2);
    println!("run time {:.3} s", sim.run_time_s);
    Ok(())
}
