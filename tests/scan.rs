//! Scans agree with single simulations and refuse paths that do not exist.

use kicktrain::scan::{Axis, scan, set_path};
use kicktrain::scenario::Scenario;
use kicktrain::simulate::simulate;
use std::sync::atomic::AtomicBool;

const TWO: &str = r#"{"molecule": "N2", "temperature_k": 300,
 "pulses": [{"center_ps": 0, "fwhm_fs": 50, "peak_intensity_wcm2": 4e13}, {"center_ps": 4, "fwhm_fs": 50, "peak_intensity_wcm2": 2e13}],
 "window": {"start_ps": 0, "stop_ps": 13, "step_fs": 20}}"#;

#[test]
fn a_scan_over_one_value_equals_simulate_at_that_value() {
    let base: serde_json::Value = serde_json::from_str(TWO).unwrap();
    for (x, y) in [(4.1, 2e13), (8.3, 3.5e13)] {
        let r = scan(
            &base,
            &Axis::linear("pulses[1].center_ps", x, x, 1).unwrap(),
            Some(&Axis::linear("pulses[1].peak_intensity_wcm2", y, y, 1).unwrap()),
            None,
            &|| {},
            &AtomicBool::new(false),
        )
        .unwrap();
        let mut v = base.clone();
        set_path(&mut v, "pulses[1].center_ps", x).unwrap();
        set_path(&mut v, "pulses[1].peak_intensity_wcm2", y).unwrap();
        let sim = simulate(&Scenario::from_value(&v, "").unwrap()).unwrap();
        let s = kicktrain::report::simulation_summary(&sim);
        let want = s["peak_cos2"]["value"].as_f64().unwrap();
        assert!((r.values[0][0] - want).abs() < 1e-12, "scan {} vs simulate {want}", r.values[0][0]);
    }
}

#[test]
fn bad_paths_and_values_name_the_field() {
    let base: serde_json::Value = serde_json::from_str(TWO).unwrap();
    let err = scan(&base, &Axis::linear("pulses[5].center_ps", 0.0, 1.0, 2).unwrap(), None, None, &|| {}, &AtomicBool::new(false)).unwrap_err().to_string();
    assert!(err.starts_with("pulses[5].center_ps:"), "{err}");
    let err = scan(&base, &Axis::linear("pulses[1].fwhm_fs", -10.0, 10.0, 3).unwrap(), None, None, &|| {}, &AtomicBool::new(false)).unwrap_err().to_string();
    assert!(err.starts_with("pulses[1].fwhm_fs:") && err.contains("scan point"), "{err}");
    assert!(Axis::linear("temperature_k", 0.0, 1.0, 0).is_err());
}

#[test]
fn a_scan_whose_total_steps_exceed_the_limit_is_refused_before_it_starts() {
    // Checks: each point fits solver.max_steps, but 60 points exceed 50 × max_steps in all: refused at
    // once naming --steps; 40 points run.
    let mut base: serde_json::Value = serde_json::from_str(TWO).unwrap();
    base["solver"] = serde_json::json!({"method": "finite"});
    let s = Scenario::from_value(&base, "").unwrap();
    let per_run = kicktrain::simulate::Solver::new(&s.molecule, s.temperature_k, s.solver).unwrap().time_steps(&s.field).0;
    assert!(per_run > 10.0, "{per_run}");
    base["solver"]["max_steps"] = serde_json::json!(per_run + 1.0);
    let stop = AtomicBool::new(false);
    let err = scan(&base, &Axis::linear("pulses[1].center_ps", 3.0, 5.0, 60).unwrap(), None, None, &|| {}, &stop).unwrap_err().to_string();
    assert!(err.starts_with("--steps: the scan would take"), "{err}");
    let t0 = std::time::Instant::now();
    assert!(scan(&base, &Axis::linear("pulses[1].center_ps", 3.0, 5.0, 40).unwrap(), None, None, &|| {}, &stop).is_ok());
    assert!(t0.elapsed().as_secs() < 60);
}
