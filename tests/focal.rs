//! Focal-volume averaging and pulses given by energy: limits that hold whatever the molecule.

use kicktrain::field::{FieldModel, Pulse};
use kicktrain::molecule::Molecule;
use kicktrain::optics::focal::FocalAverage;
use kicktrain::scenario::{Scenario, SolverSettings};
use kicktrain::simulate::{Solver, simulate};

fn grid(start: f64, stop: f64, step: f64) -> Vec<f64> {
    let n = ((stop - start) / step).round() as usize;
    (0..=n).map(|i| start + i as f64 * step).collect()
}

#[test]
fn a_uniform_pump_leaves_the_trace_unchanged() {
    // Exact limit: a pump much wider than the probe gives every detected molecule the on-axis intensity.
    let mol = Molecule::from_library("N2", "m").unwrap();
    let times = grid(0.1, 9.0, 0.05);
    let field = FieldModel::pulses(vec![Pulse::gaussian(0.0, 60.0, 4e13)]);
    let solver = Solver::new(&mol, 200.0, SolverSettings::default()).unwrap();
    let on_axis = solver.run(&field, &times, true).unwrap().trace;
    let wide = FocalAverage { pump_waist_um: 1e5, probe_waist_um: 10.0, probe_order: 1.0, points: 8 };
    let avg = solver.run_focal(&field, &times, true, &wide).unwrap().trace;
    for i in 0..times.len() {
        assert!((avg.cos2[i] - on_axis.cos2[i]).abs() < 1e-6 && (avg.cos2_2d[i] - on_axis.cos2_2d[i]).abs() < 1e-6);
    }
}

#[test]
fn a_gaussian_pump_never_raises_the_peak_alignment() {
    // Molecules off axis see less intensity; for pulses below saturation of the alignment the average
    // cannot exceed the on-axis peak (common practice; checked for several probe sizes and orders).
    let mol = Molecule::from_library("CO2", "m").unwrap();
    let times = grid(0.05, 45.0, 0.05);
    let field = FieldModel::pulses(vec![Pulse::gaussian(0.0, 100.0, 1e13)]);
    let solver = Solver::new(&mol, 20.0, SolverSettings::default()).unwrap();
    let on_axis = solver.run(&field, &times, false).unwrap().trace;
    let peak_on = on_axis.cos2.iter().cloned().fold(0.0, f64::max);
    for (probe, order) in [(20.0, 1.0), (30.0, 2.0), (45.0, 3.0)] {
        let avg = FocalAverage { pump_waist_um: 50.0, probe_waist_um: probe, probe_order: order, points: 20 };
        let t = solver.run_focal(&field, &times, false, &avg).unwrap().trace;
        let peak = t.cos2.iter().cloned().fold(0.0, f64::max);
        assert!(peak <= peak_on + 1e-12, "probe {probe} µm, order {order}: {peak} > {peak_on}");
        assert!(peak > 1.0 / 3.0 + 0.3 * (peak_on - 1.0 / 3.0), "the average must still show alignment");
    }
}

#[test]
fn scenario_with_energy_and_focal_average_reports_both() {
    let text = r#"{"molecule": "N2", "temperature_k": 100,
        "pulses": [{"center_ps": 0, "fwhm_fs": 60, "energy_mj": 0.2, "beam_radius_mm": 4, "wavelength_nm": 800, "focal_length_mm": 500}],
        "focal_average": {"pump_waist_um": 31.8, "probe_waist_um": 20, "probe_order": 2},
        "window": {"start_ps": 0, "stop_ps": 10, "step_fs": 50}}"#;
    let s = Scenario::from_json_str(text, "x").unwrap();
    // w0 = λf/(π w_in) = 31.83 µm; P = 0.9394 × 0.2 mJ / 60 fs = 3.131e9 W; I0 = 2P/(π w0²) = 1.967e14 W/cm²
    // (Gaussian-beam optics, Siegman 1986; worked by hand).
    assert!((s.field.pulses[0].peak_intensity_wcm2 / 1.967e14 - 1.0).abs() < 2e-3, "{}", s.field.pulses[0].peak_intensity_wcm2);
    let sim = simulate(&s).unwrap();
    let avg = sim.averaged.as_ref().unwrap();
    let on = sim.result.trace.cos2.iter().cloned().fold(0.0, f64::max);
    let av = avg.trace.cos2.iter().cloned().fold(0.0, f64::max);
    assert!(av < on && av > 1.0 / 3.0);
    let summary = kicktrain::report::simulation_summary(&sim);
    assert!(summary["pulses"][0]["energy_mj"].as_f64().unwrap() == 0.2);
    assert!(summary["focal_average"]["peak_cos2"]["value"].as_f64().unwrap() < on);
}
