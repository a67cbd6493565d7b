//! Thermal ensembles against values computed outside the ensemble code: direct sums over J written
//! here, the high-temperature expansion of the rotational partition function, and stored traces from an
//! independent numpy/scipy reference (`tools/reference/rotor_reference.py`).
//!
//! The cases that matter most are those where a spin weight is zero (CO2, CS2 and O2 have no odd or no
//! even J levels): a truncation rule that looks at a forbidden level's zero population must not take it
//! for the end of the distribution.

use kicktrain::ensemble::ThermalEnsemble;
use kicktrain::molecule::Molecule;
use kicktrain::scenario::{Scenario, SolverSettings};
use kicktrain::simulate::{Solver, simulate};
use kicktrain::units::kt_in_cm;

/// Rotational constants of the three linear test molecules, as in `kicktrain molecules`.
fn linear(name: &str) -> Molecule {
    match name {
        "CO2-like" => Molecule::linear(name, 0.39021, 1.333e-7, 4.038, 1.929, [1.0, 0.0]),
        "O2-like" => Molecule::linear(name, 1.437677, 4.839e-6, 2.302, 1.202, [0.0, 1.0]),
        "N2-like" => Molecule::linear(name, 1.98958, 5.76e-6, 2.207, 1.507, [2.0, 1.0]),
        _ => unreachable!(),
    }
}

/// (partition function, population of the levels above `j_top`) by a plain sum over J (every level up
/// to J = 250, far past where any term counts at these temperatures and below each molecule's
/// distortion turnover).
fn direct_sum(m: &Molecule, temperature_k: f64, j_top: u32) -> (f64, f64) {
    let m = m.as_linear().unwrap();
    let kt = kt_in_cm(temperature_k);
    let gmax = m.spin_weights[0].max(m.spin_weights[1]);
    let energy = |j: u32| {
        let x = (j * (j + 1)) as f64;
        m.b_cm * x - m.d_cm * x * x
    };
    let e0 = if m.spin_weights[0] > 0.0 { 0.0 } else { energy(1) };
    let (mut z, mut above) = (0.0, 0.0);
    for j in 0..=250u32 {
        let term = m.spin_weights[(j % 2) as usize] / gmax * (2 * j + 1) as f64 * (-(energy(j) - e0) / kt).exp();
        z += term;
        if j > j_top {
            above += term;
        }
    }
    (z, above / z)
}

#[test]
fn partition_function_and_discarded_population_equal_a_direct_sum() {
    // The rotational partition function summed term by term (definition: e.g. McQuarrie, Statistical
    // Mechanics, ch. 6) and the population of the levels the ensemble leaves out, for molecules with
    // a zero spin weight (CO2-like: no odd J; O2-like: no even J) and without one (N2-like, 2 : 1).
    for name in ["CO2-like", "O2-like", "N2-like"] {
        let m = linear(name);
        for t in [10.0, 100.0, 300.0] {
            for tol in [1e-7, 1e-10] {
                let e = ThermalEnsemble::new(&m, t, tol).unwrap();
                let (z, above) = direct_sum(&m, t, e.j_max);
                assert!((e.partition_function / z - 1.0).abs() < 1e-12, "{name} {t} K: Z {} vs direct {z}", e.partition_function);
                assert!(
                    (e.discarded_population - above).abs() < 1e-14 + 1e-9 * above,
                    "{name} {t} K tol {tol}: discarded {} vs direct {above}",
                    e.discarded_population
                );
                assert!(e.discarded_population <= tol, "{name} {t} K: {} above the tolerance {tol}", e.discarded_population);
                // The truncation is not wasteful either: one level fewer would leave out more than the tolerance.
                let (_, one_fewer) = direct_sum(&m, t, e.j_max - 1);
                assert!(one_fewer > tol, "{name} {t} K: J = {} was not needed", e.j_max);
                // Kept populations are the Boltzmann ones renormalized by the kept share.
                let kept: f64 = e.blocks.iter().map(|b| b.total()).sum();
                assert!((kept - 1.0).abs() < 1e-12);
            }
        }
    }
}

#[test]
fn partition_function_follows_the_high_temperature_expansion() {
    // Mulholland's expansion of the rigid-rotor partition function,
    // q = (T/σΘ)[1 + Θ/(3T) + (Θ/T)²/15 + 4(Θ/T)³/315 + …], Θ = hcB/k (Mulholland, Proc. Camb. Phil. Soc.
    // 24, 280 (1928); McQuarrie, Statistical Mechanics, ch. 6; coefficients from memory). σ = 1 for
    // equal spin weights. With only even or only odd J (σ = 2) each sum is q/2: their difference, the
    // alternating series Σ(−1)^J(2J+1)exp(−J(J+1)Θ/T), vanishes faster than any power of Θ/T (its Poisson
    // resummation has no zero-frequency term; common practice, and checked numerically while writing this
    // test: 3.5e-9 at Θ/T = 0.1).
    for (b, t) in [(0.39021, 10.0), (0.39021, 100.0), (1.98958, 300.0), (1.437677, 100.0)] {
        let theta_over_t = b / kt_in_cm(t);
        let q = (1.0 / theta_over_t) * (1.0 + theta_over_t / 3.0 + theta_over_t.powi(2) / 15.0 + 4.0 * theta_over_t.powi(3) / 315.0);
        let all = ThermalEnsemble::new(&Molecule::linear("rigid", b, 0.0, 3.0, 2.0, [1.0, 1.0]), t, 1e-9).unwrap();
        assert!((all.partition_function / q - 1.0).abs() < 2.0 * theta_over_t.powi(4), "B {b} T {t}: {} vs {q}", all.partition_function);
        let even = ThermalEnsemble::new(&Molecule::linear("rigid even", b, 0.0, 3.0, 2.0, [1.0, 0.0]), t, 1e-9).unwrap();
        let odd = ThermalEnsemble::new(&Molecule::linear("rigid odd", b, 0.0, 3.0, 2.0, [0.0, 1.0]), t, 1e-9).unwrap();
        // Odd J is measured from J = 1: its sum carries exp(2Θ/T).
        let odd_from_j0 = odd.partition_function * (-2.0 * theta_over_t).exp();
        assert!((even.partition_function + odd_from_j0 - all.partition_function).abs() < 1e-9 * all.partition_function);
        assert!((even.partition_function / (q / 2.0) - 1.0).abs() < 2.0 * theta_over_t.powi(4), "even {} vs {}", even.partition_function, q / 2.0);
        assert!((odd_from_j0 / (q / 2.0) - 1.0).abs() < 2.0 * theta_over_t.powi(4), "odd {} vs {}", odd_from_j0, q / 2.0);
    }
}

#[test]
fn library_co2_at_100_k_and_o2_at_300_k_report_a_truthful_truncation() {
    // The library's CO2 (no odd J) and O2 (no even N) through the solver: the discarded population in the
    // summary equals the direct sum above the kept J and is below the default tolerance (1e-7).
    for (name, t) in [("CO2", 100.0), ("O2", 300.0), ("CS2", 50.0)] {
        let m = Molecule::from_library(name, "molecule").unwrap();
        let solver = Solver::new(&m, t, SolverSettings::default()).unwrap();
        let e = solver.ensemble().expect("linear");
        let (z, above) = direct_sum(&m, t, e.j_max);
        assert!((solver.partition_function() / z - 1.0).abs() < 1e-12);
        assert!((solver.discarded_population() - above).abs() < 1e-14 + 1e-9 * above, "{name}: {} vs {above}", solver.discarded_population());
        assert!(solver.discarded_population() <= 1e-7 && solver.discarded_population() > 0.0);
        // Every kept level has the allowed parity, and the kept range reaches past the Boltzmann peak.
        let allowed = if m.as_linear().unwrap().spin_weights[0] > 0.0 { 0 } else { 1 };
        assert!(e.blocks.iter().all(|b| b.parity == allowed && !b.levels.is_empty()));
        let j_peak = (kt_in_cm(t) / (2.0 * m.as_linear().unwrap().b_cm)).sqrt();
        assert!(e.j_max as f64 > 3.0 * j_peak, "{name}: J_max {} vs peak {j_peak:.1}", e.j_max);
    }
}

#[test]
fn a_zero_weight_at_low_temperature_and_at_zero_temperature() {
    // Where the lowest level is forbidden: the O2-like rotor's ground level is J = 1 (three sublevels);
    // at 0.5 K J = 3 lies 14.4 cm⁻¹ higher (kT = 0.35 cm⁻¹), so J = 1 alone carries all but ~1e-17.
    let m = linear("O2-like");
    let e = ThermalEnsemble::new(&m, 0.5, 1e-7).unwrap();
    assert_eq!(e.state_count(), 3);
    assert!(e.discarded_population < 1e-15);
    assert!((e.partition_function - 3.0).abs() < 1e-12, "{}", e.partition_function);
    let e0 = ThermalEnsemble::new(&m, 0.0, 1e-7).unwrap();
    assert_eq!(e0.state_count(), 3);
    assert_eq!(e0.partition_function, 3.0);
    // A 1 : 0 molecule at 0 K sits in J = 0 only.
    let c = ThermalEnsemble::new(&linear("CO2-like"), 0.0, 1e-7).unwrap();
    assert_eq!(c.state_count(), 1);
}

#[test]
fn no_block_is_empty_and_none_is_dropped() {
    // Every populated (|M|, parity) block carries at least one level, and the blocks together list each
    // allowed level of J ≤ J_max exactly 2J + 1 times (counting ±M): nothing between the ground level and
    // the truncation goes missing, whatever the spin weights.
    for name in ["CO2-like", "O2-like", "N2-like"] {
        let m = linear(name);
        let e = ThermalEnsemble::new(&m, 100.0, 1e-8).unwrap();
        let mut count = vec![0usize; e.j_max as usize + 1];
        for b in &e.blocks {
            assert!(!b.levels.is_empty());
            for &(j, p) in &b.levels {
                assert!(p > 0.0);
                count[j as usize] += if b.m == 0 { 1 } else { 2 };
            }
        }
        for j in 0..=e.j_max {
            let allowed = m.as_linear().unwrap().spin_weights[(j % 2) as usize] > 0.0;
            assert_eq!(count[j as usize], if allowed { 2 * j as usize + 1 } else { 0 }, "{name} J = {j}");
        }
    }
}

#[test]
fn tops_with_a_zero_spin_weight_sum_their_partition_function_to_convergence() {
    // A prolate symmetric top, E = B J(J+1) + (A − B)K² (rigid; Townes & Schawlow, Microwave
    // Spectroscopy, ch. 4), summed directly over J, K, M with weights by |K| mod 3; [0, 1, 1] has no
    // K = 0, 3, 6, … levels at all (hypothetical; it empties the K = 0 block), [2, 1, 1] is CH3F's.
    for weights in ["[0, 1, 1]", "[2, 1, 1]", "[1, 0, 0]"] {
        for t in [1.0, 5.0, 30.0] {
            let text = format!(
                r#"{{"molecule": {{"name": "prolate", "a_cm": 5.182, "b_cm": 0.85179, "c_cm": 0.85179,
                "polarizability_a3": {{"a": 3.24, "b": 2.84, "c": 2.84}}, "spin_weights_by_k": {weights}}},
                "temperature_k": {t}, "pulses": [], "window": {{"start_ps": 0, "stop_ps": 1, "step_fs": 100}}}}"#
            );
            let s = Scenario::from_json_str(&text, "test").unwrap();
            let w: Vec<f64> = serde_json::from_str(weights).unwrap();
            let gmax = w.iter().cloned().fold(0.0, f64::max);
            let kt = kt_in_cm(t);
            let energy = |j: i64, k: i64| 0.85179 * (j * (j + 1)) as f64 + (5.182 - 0.85179) * (k * k) as f64;
            let mut terms = vec![];
            for j in 0..=120i64 {
                for k in -j..=j {
                    let g = w[(k.unsigned_abs() as usize) % w.len()] / gmax;
                    if g > 0.0 {
                        terms.push((j, g * (2 * j + 1) as f64, energy(j, k)));
                    }
                }
            }
            let e0 = terms.iter().map(|x| x.2).fold(f64::INFINITY, f64::min);
            let z: f64 = terms.iter().map(|x| x.1 * (-(x.2 - e0) / kt).exp()).sum();
            let solver = Solver::new(&s.molecule, t, s.solver).unwrap();
            assert!((solver.partition_function() / z - 1.0).abs() < 1e-12, "{weights} {t} K: {} vs {z}", solver.partition_function());
            assert!(solver.discarded_population() <= s.solver.thermal_tolerance);
            let kept_by_j = solver.initial_states();
            assert!(kept_by_j > 0);
        }
    }
}

/// A stored reference trace: column names, rows, and the partition function from its header (if given).
struct Reference {
    columns: Vec<String>,
    rows: Vec<Vec<f64>>,
    partition_function: Option<f64>,
}

fn reference(case: &str) -> Reference {
    let path = format!("{}/tests/data/reference_{case}.csv", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    let mut partition_function = None;
    let mut columns = vec![];
    let mut rows = vec![];
    for line in text.lines() {
        if let Some(c) = line.strip_prefix('#') {
            let lower = c.to_lowercase();
            if lower.contains("partition_function") && partition_function.is_none() {
                partition_function = c.split([':', '=']).nth(1).and_then(|v| v.split_whitespace().next()).and_then(|v| v.parse().ok());
            }
        } else if columns.is_empty() {
            columns = line.split(',').map(|x| x.trim().to_string()).collect();
        } else if !line.trim().is_empty() {
            rows.push(line.split(',').map(|x| x.trim().parse().unwrap()).collect());
        }
    }
    Reference { columns, rows, partition_function }
}

/// The scenario of each reference case (the same numbers as in the script's case table).
fn reference_scenario(case: &str) -> Scenario {
    let co2 = r#"{"name": "CO2-like", "b_cm": 0.39021, "d_cm": 1.333e-7, "alpha_parallel_a3": 4.038, "alpha_perpendicular_a3": 1.929, "spin_weights": [1, 0]}"#;
    let o2 = r#"{"name": "O2-like", "b_cm": 1.437677, "d_cm": 4.839e-6, "alpha_parallel_a3": 2.302, "alpha_perpendicular_a3": 1.202, "spin_weights": [0, 1]}"#;
    let prolate = r#"{"name": "prolate K=3n absent", "a_cm": 5.182, "b_cm": 0.85179, "c_cm": 0.85179, "polarizability_a3": {"a": 3.24, "b": 2.84, "c": 2.84}, "spin_weights_by_k": [0, 1, 1]}"#;
    let so2 = r#"{"name": "SO2-like", "a_cm": 2.02736, "b_cm": 0.34417, "c_cm": 0.29354, "polarizability_a3": {"a": 5.5, "b": 3.5, "c": 2.7}, "spin_weights_by_ka_kc": [1, 0, 0, 1]}"#;
    let (mol, t, fwhm, intensity, window) = match case {
        "co2like_20k" => (co2, 20.0, 100.0, 3e13, (-0.2, 45.0, 250.0)),
        "co2like_100k" => (co2, 100.0, 100.0, 3e13, (-0.2, 45.0, 250.0)),
        "o2like_30k" => (o2, 30.0, 60.0, 5e13, (-0.1, 12.0, 50.0)),
        "o2like_300k" => (o2, 300.0, 60.0, 5e13, (-0.1, 12.0, 50.0)),
        "prolate_k3_5k" => (prolate, 5.0, 200.0, 3e13, (-0.4, 20.0, 100.0)),
        "prolate_k3_30k" => (prolate, 30.0, 200.0, 3e13, (-0.4, 20.0, 100.0)),
        "so2like_1k" => (so2, 1.0, 500.0, 1e12, (-1.0, 60.0, 500.0)),
        "so2like_4k" => (so2, 4.0, 500.0, 1e12, (-1.0, 60.0, 500.0)),
        _ => unreachable!(),
    };
    let text = format!(
        r#"{{"molecule": {mol}, "temperature_k": {t}, "pulses": [{{"center_ps": 0, "fwhm_fs": {fwhm}, "peak_intensity_wcm2": {intensity}}}],
        "window": {{"start_ps": {}, "stop_ps": {}, "step_fs": {}}}, "solver": {{"method": "finite"}}}}"#,
        window.0, window.1, window.2
    );
    Scenario::from_json_str(&text, "test").unwrap()
}

/// Largest difference between the reference columns and the same columns of kicktrain's trace.
fn worst_difference(case: &str, columns: &[&str]) -> f64 {
    let r = reference(case);
    let s = reference_scenario(case);
    let sim = simulate(&s).unwrap();
    let tr = &sim.result.trace;
    assert_eq!(tr.times_ps.len(), r.rows.len(), "{case}: sample count");
    let mut worst: f64 = 0.0;
    for name in columns {
        let col = r.columns.iter().position(|c| c == name).unwrap_or_else(|| panic!("{case}: no column {name}"));
        let ours = match *name {
            "cos2" => &tr.cos2,
            "cos2_a" => &tr.body_axes.as_ref().unwrap().a,
            "cos2_b" => &tr.body_axes.as_ref().unwrap().b,
            "cos2_c" => &tr.body_axes.as_ref().unwrap().c,
            _ => unreachable!(),
        };
        for (row, v) in r.rows.iter().zip(ours) {
            worst = worst.max((row[col] - v).abs());
        }
    }
    for (row, t) in r.rows.iter().zip(&tr.times_ps) {
        assert!((row[0] - t).abs() < 1e-9, "{case}: time {} vs {t}", row[0]);
    }
    worst
}

#[test]
fn thermal_traces_of_zero_weight_rotors_match_the_independent_reference() {
    // Stored traces from tools/reference/rotor_reference.py: its own spherical-harmonic quadrature,
    // Boltzmann sum to convergence and a DOP853 solution of the Schrödinger equation (scipy), nothing
    // shared with kicktrain. Tolerance 1e-5.
    for case in ["co2like_20k", "co2like_100k", "o2like_30k", "o2like_300k"] {
        let worst = worst_difference(case, &["cos2"]);
        eprintln!("{case}: worst difference {worst:.2e}");
        assert!(worst < 1e-5, "{case}: worst difference {worst:.2e}");
    }
}

#[test]
fn thermal_traces_of_tops_with_a_zero_spin_weight_match_the_independent_reference() {
    // As above for a symmetric top whose K = 3n levels are absent and an SO2-like asymmetric top whose
    // Ka + Kc odd levels are absent (reference: its own Wigner-function quadrature and per-J
    // diagonalization, level classes read from the energy ordering).
    for case in ["prolate_k3_5k", "prolate_k3_30k", "so2like_1k", "so2like_4k"] {
        let worst = worst_difference(case, &["cos2_a", "cos2_b", "cos2_c"]);
        eprintln!("{case}: worst difference {worst:.2e}");
        assert!(worst < 1e-5, "{case}: worst difference {worst:.2e}");
        let r = reference(case);
        let s = reference_scenario(case);
        let solver = Solver::new(&s.molecule, s.temperature_k, s.solver).unwrap();
        let q = r.partition_function.expect("the reference states its partition function");
        assert!((solver.partition_function() / q - 1.0).abs() < 1e-9, "{case}: Z {} vs reference {q}", solver.partition_function());
    }
}
