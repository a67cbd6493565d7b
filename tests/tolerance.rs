//! Tolerance analysis: zero noise gives the nominal score exactly; noise is reproducible by seed.

use kicktrain::scenario::Scenario;
use kicktrain::tolerance::{Noise, tolerance};
use std::sync::atomic::AtomicBool;

const DESIGN: &str = r#"{"molecule": "N2", "temperature_k": 300,
 "pulses": [{"center_ps": 0, "fwhm_fs": 50, "peak_intensity_wcm2": 4e13}, {"center_ps": 4.05, "fwhm_fs": 50, "peak_intensity_wcm2": 4e13}],
 "window": {"start_ps": 0, "stop_ps": 13, "step_fs": 20},
 "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.05, 9.0], "step_fs": 20}}"#;

#[test]
fn zero_noise_gives_the_nominal_score_exactly_and_noise_is_reproducible() {
    let s = Scenario::from_json_str(DESIGN, "x").unwrap();
    let quiet = tolerance(&s, Noise { jitter_fs: 0.0, energy_percent: 0.0, phase_rad: 0.0 }, 8, 1, &AtomicBool::new(false)).unwrap();
    let nominal = kicktrain::design::score::simulate_scored(&s, Default::default()).unwrap().goal_score.unwrap().value;
    assert_eq!(quiet.nominal.to_bits(), nominal.to_bits());
    assert!(quiet.samples.iter().all(|v| v.to_bits() == nominal.to_bits()));
    assert!(quiet.spread < 1e-15, "{}", quiet.spread);
    let noisy = Noise { jitter_fs: 30.0, energy_percent: 5.0, phase_rad: 0.0 };
    let a = tolerance(&s, noisy, 16, 7, &AtomicBool::new(false)).unwrap();
    let b = tolerance(&s, noisy, 16, 7, &AtomicBool::new(false)).unwrap();
    assert_eq!(a.samples, b.samples);
    assert!(a.spread > 1e-4, "noise must show: {}", a.spread);
    assert!(a.worst_decile <= a.mean);
}

#[test]
fn a_scenario_without_goal_is_refused() {
    let s = Scenario::from_json_str(
        &DESIGN.replace(
            r#",
 "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.05, 9.0], "step_fs": 20}"#,
            "",
        ),
        "x",
    )
    .unwrap();
    let err = tolerance(&s, Noise { jitter_fs: 1.0, energy_percent: 0.0, phase_rad: 0.0 }, 4, 1, &AtomicBool::new(false)).unwrap_err().to_string();
    assert!(err.starts_with("goal:"), "{err}");
}

#[test]
fn too_many_samples_of_a_costly_run_are_refused_before_they_start() {
    // Checks: samples × the run's finite-pulse steps above 50 × solver.max_steps is refused naming samples.
    let mut v: serde_json::Value = serde_json::from_str(DESIGN).unwrap();
    v["solver"] = serde_json::json!({"method": "finite"});
    let s = Scenario::from_value(&v, "").unwrap();
    let per_run = kicktrain::simulate::Solver::new(&s.molecule, s.temperature_k, s.solver).unwrap().time_steps(&s.field).0;
    v["solver"]["max_steps"] = serde_json::json!(per_run + 1.0);
    let s = Scenario::from_value(&v, "").unwrap();
    let noise = Noise { jitter_fs: 10.0, energy_percent: 1.0, phase_rad: 0.0 };
    let err = tolerance(&s, noise, 200, 1, &AtomicBool::new(false)).unwrap_err().to_string();
    assert!(err.starts_with("samples:"), "{err}");
    assert!(tolerance(&s, noise, 4, 1, &AtomicBool::new(false)).is_ok());
}
