//! Focal-volume averaging and pulses given by energy: limits that hold whatever the molecule.

use kicktrain::field::{FieldModel, Pulse};
use kicktrain::molecule::Molecule;
use kicktrain::optics::focal::FocalAverage;
use kicktrain::scenario::{Scenario, SolverSettings};
use kicktrain::simulate::{Solver, simulate};
#[path = "common/series.rs"]
mod series;
use series::grid;

#[test]
fn a_uniform_pump_leaves_the_trace_unchanged() {
    // Exact limit: a pump much wider than the probe gives every detected molecule the on-axis intensity.
    let mol = Molecule::from_library("N2", "m").unwrap();
    let times = grid(0.1, 9.0, 0.05);
    let field = FieldModel::pulses(vec![Pulse::gaussian(0.0, 60.0, 4e13)]);
    let solver = Solver::new(&mol, 200.0, SolverSettings::default()).unwrap();
    let on_axis = solver.run(&field, &times, true).unwrap().trace;
    let wide = FocalAverage::thin(1e5, 10.0, 1.0, 8);
    let avg = solver.run_focal(&field, &times, true, &wide).unwrap().trace;
    for i in 0..times.len() {
        assert!((avg.cos2[i] - on_axis.cos2[i]).abs() < 1e-6 && (avg.cos2_2d().unwrap()[i] - on_axis.cos2_2d().unwrap()[i]).abs() < 1e-6);
    }
}

#[test]
fn a_gaussian_pump_never_raises_the_peak_alignment() {
    // Molecules off axis see less intensity; for pulses below saturation of the alignment (peak ⟨cos²θ⟩
    // growing with intensity) the average, a weighted mean of traces each below its own peak, cannot exceed
    // the on-axis peak (common practice; checked for several probe sizes and orders).
    let mol = Molecule::from_library("CO2", "m").unwrap();
    let times = grid(0.05, 45.0, 0.05);
    let field = FieldModel::pulses(vec![Pulse::gaussian(0.0, 100.0, 1e13)]);
    let solver = Solver::new(&mol, 20.0, SolverSettings::default()).unwrap();
    let on_axis = solver.run(&field, &times, false).unwrap().trace;
    let peak_on = on_axis.cos2.iter().cloned().fold(0.0, f64::max);
    for (probe, order) in [(20.0, 1.0), (30.0, 2.0), (45.0, 3.0)] {
        let avg = FocalAverage::thin(50.0, probe, order, 20);
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
    // w0 = λf/(π w_in) = 0.8 µm × 500 mm / (π × 4 mm) = 31.83 µm; P = 0.9394 × 0.2 mJ / 60 fs = 3.131e9 W
    // (0.9394 = sqrt(4 ln2/π), the reciprocal of the Gaussian envelope area ∫f dt/τ = sqrt(π/(4 ln2)));
    // I0 = 2P/(π w0²) = 1.967e14 W/cm² (Gaussian-beam optics, A. E. Siegman, "Lasers" (1986); worked by hand).
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

/// Composite Simpson rule on [a, b] with `n` (even) intervals.
fn simpson(a: f64, b: f64, n: usize, f: impl Fn(f64) -> f64) -> f64 {
    let h = (b - a) / n as f64;
    let mut s = f(a) + f(b);
    for i in 1..n {
        s += if i % 2 == 1 { 4.0 } else { 2.0 } * f(a + i as f64 * h);
    }
    s * h / 3.0
}

#[test]
fn the_axial_average_matches_a_direct_volume_integral() {
    // Independent check of the slice weights and exponents (no outside value: a brute-force quadrature of the
    // same model, written out here from the beam formulas): integrate the probe signal
    // ∫dz ∫2πr dr I_probe(r,z)^n O(I(r,z)) / ∫dz ∫2πr dr I_probe(r,z)^n directly over the focal volume with
    // Simpson's rule in r and z, using the Gaussian-beam fields I(r,z) = I0/(1+z²/z_R²) exp(−2r²/w(z)²),
    // w(z) = w0 √(1+z²/z_R²) (Siegman, "Lasers", 1986, ch. 17), and compare with the condensed rule.
    let (w0, wp0, zr, zp, n, len) = (50.0f64, 30.0f64, 3000.0f64, 1200.0f64, 2.0f64, 8000.0f64);
    let avg = FocalAverage::thin(w0, wp0, n, 20).along_axis(len, zr, zp);
    avg.validate("f").unwrap();
    type Observable = fn(f64) -> f64;
    let observables: [(&str, Observable); 3] = [("u", |u| u), ("u^2", |u| u * u), ("sin^2(4u)", |u| (4.0 * u).sin().powi(2))];
    for (name, obs) in observables {
        let volume = |o: &dyn Fn(f64) -> f64| {
            simpson(-0.5 * len, 0.5 * len, 4000, |z| {
                let (q, qp) = (1.0 + (z / zr).powi(2), 1.0 + (z / zp).powi(2));
                let (w2, wp2) = (w0 * w0 * q, wp0 * wp0 * qp);
                let rmax = 7.0 * wp2.sqrt() / n.sqrt();
                simpson(0.0, rmax, 1000, |r| {
                    let probe = (-2.0 * r * r / wp2).exp() / qp;
                    let u = (-2.0 * r * r / w2).exp() / q;
                    2.0 * std::f64::consts::PI * r * probe.powf(n) * o(u)
                })
            })
        };
        let direct = volume(&obs) / volume(&|_| 1.0);
        let rule: f64 = avg.nodes().iter().map(|(u, w)| w * obs(*u)).sum();
        assert!((rule - direct).abs() < 5e-9 * direct.abs().max(1e-3), "{name}: rule {rule} vs direct {direct}");
    }
}

#[test]
fn a_short_sample_along_the_beam_reproduces_the_thin_average() {
    // Limit: a sample 1 µm long in a focus with Rayleigh ranges of millimetres sees only focal-plane intensities.
    let mol = Molecule::from_library("N2", "m").unwrap();
    let times = grid(0.1, 9.0, 0.05);
    let field = FieldModel::pulses(vec![Pulse::gaussian(0.0, 60.0, 6e13)]);
    let solver = Solver::new(&mol, 100.0, SolverSettings::default()).unwrap();
    let thin = FocalAverage::thin(50.0, 30.0, 2.0, 16);
    let short = thin.along_axis(1.0, 9817.0, 3534.0);
    let a = solver.run_focal(&field, &times, true, &thin).unwrap().trace;
    let b = solver.run_focal(&field, &times, true, &short).unwrap().trace;
    for (i, t) in times.iter().enumerate() {
        assert!((a.cos2[i] - b.cos2[i]).abs() < 1e-6 && (a.cos2_2d().unwrap()[i] - b.cos2_2d().unwrap()[i]).abs() < 1e-6, "t = {t}");
    }
}

#[test]
fn averaging_along_the_beam_never_raises_the_peak_alignment() {
    // Molecules away from the focus see less intensity (I0/(1+z²/z_R²), Siegman, "Lasers" (1986)); below
    // saturation of the alignment the average cannot exceed the on-axis peak (common practice, as above).
    // Longer samples lower it further here.
    let mol = Molecule::from_library("CO2", "m").unwrap();
    let times = grid(0.05, 45.0, 0.05);
    let field = FieldModel::pulses(vec![Pulse::gaussian(0.0, 100.0, 1e13)]);
    let solver = Solver::new(&mol, 20.0, SolverSettings::default()).unwrap();
    let on_axis = solver.run(&field, &times, false).unwrap().trace;
    let peak_on = on_axis.cos2.iter().cloned().fold(0.0, f64::max);
    let mut last = peak_on;
    for len in [500.0, 4000.0, 20000.0] {
        let avg = FocalAverage::thin(50.0, 30.0, 2.0, 12).along_axis(len, 2000.0, 1500.0);
        let t = solver.run_focal(&field, &times, false, &avg).unwrap().trace;
        let peak = t.cos2.iter().cloned().fold(0.0, f64::max);
        assert!(peak <= peak_on + 1e-12, "sample {len} µm: {peak} > {peak_on}");
        assert!(peak <= last + 1e-9, "sample {len} µm: {peak} above the shorter sample's {last}");
        assert!(peak > 1.0 / 3.0 && t.cos2.iter().all(|v| v.is_finite()));
        last = peak;
    }
}

const AXIAL: &str = r#"{"molecule": "N2", "temperature_k": 100,
    "pulses": [{"center_ps": 0, "fwhm_fs": 60, "peak_intensity_wcm2": 5e13}],
    "focal_average": {"pump_waist_um": 50, "probe_waist_um": 30, "probe_order": 2, "points": 10,
        "sample_length_um": 3000, "pump_wavelength_nm": 800, "probe_rayleigh_um": 1500},
    "window": {"start_ps": 0, "stop_ps": 5, "step_fs": 50}}"#;

#[test]
fn scenario_reads_the_average_along_the_beam() {
    let s = Scenario::from_json_str(AXIAL, "x").unwrap();
    let a = s.focal_average.unwrap();
    // z_R = π w0²/λ = π (50 µm)² / 0.8 µm = 9817.5 µm (Gaussian-beam optics, Siegman 1986; worked by hand).
    assert!((a.pump_rayleigh_um.unwrap() - 9817.48).abs() < 0.01);
    assert_eq!(a.probe_rayleigh_um, Some(1500.0));
    assert_eq!(a.sample_length_um, Some(3000.0));
    let back = Scenario::from_value(&s.to_value(), "").unwrap();
    assert_eq!(back, s);
    let sim = simulate(&s).unwrap();
    let summary = kicktrain::report::simulation_summary(&sim);
    assert_eq!(summary["focal_average"]["settings"]["sample_length_um"].as_f64(), Some(3000.0));
    assert!(summary["laser_safety"].as_str().is_some());
}

#[test]
fn bad_axial_settings_are_one_line_errors_naming_the_field() {
    let err = |from: &str, to: &str| {
        let text = AXIAL.replace(from, to);
        assert_ne!(text, AXIAL, "replacement {from} not found");
        Scenario::from_json_str(&text, "x").unwrap_err().to_string()
    };
    let cases = [
        ("\"sample_length_um\": 3000", "\"sample_length_um\": -3", "focal_average.sample_length_um:"),
        ("\"sample_length_um\": 3000", "\"sample_length_um\": \"3 mm\"", "focal_average.sample_length_um:"),
        ("\"sample_length_um\": 3000", "\"sample_length_um\": 5e6", "focal_average.sample_length_um:"),
        ("\"sample_length_um\": 3000, ", "", "focal_average.pump_rayleigh_um: only used"),
        ("\"pump_wavelength_nm\": 800", "\"pump_wavelength_nm\": 0", "focal_average.pump_wavelength_nm:"),
        ("\"pump_wavelength_nm\": 800", "\"pump_wavelength_nm\": 800, \"pump_rayleigh_um\": 10", "focal_average.pump_rayleigh_um:"),
        ("\"pump_wavelength_nm\": 800", "\"pump_wavelength_nm\": 800, \"pump_m2\": 0.7", "focal_average.pump_m2:"),
        ("\"pump_wavelength_nm\": 800", "\"pump_m2\": 1.2", "focal_average.pump_m2: only used"),
        ("\"pump_wavelength_nm\": 800, ", "", "focal_average.pump_rayleigh_um: missing"),
        ("\"probe_rayleigh_um\": 1500", "\"probe_rayleigh_um\": 0", "focal_average.probe_rayleigh_um:"),
        ("\"probe_rayleigh_um\": 1500", "\"probe_rayleigh\": 1500", "focal_average.probe_rayleigh: unknown key"),
    ];
    for (from, to, want) in cases {
        let e = err(from, to);
        assert!(e.starts_with(want) && !e.contains('\n'), "{to}: {e}");
    }
}
