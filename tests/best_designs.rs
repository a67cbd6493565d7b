//! The designer with its default search (no `search` block) against best known designs established
//! outside it: `tools/reference/design_reference.py` (linear molecules: an exhaustive grid for two
//! pulses, differential evolution with at least three agreeing runs for three and four, then a
//! finite-pulse polish with its own Schrödinger solver) and `tools/reference/design_reference_polar_top.py`
//! (mixed-field orientation of OCS and three pulses on CH3F, the same way). Stored results:
//! `tests/data/best_designs_*.json`. Where a design found elsewhere scored higher with the reference's own
//! finite-pulse scorer, the file records it as `best_known` with its provenance (the score is always the
//! reference's). The designer must come within 0.002 of the best known full-solver score.

use kicktrain::design::Objective;
use kicktrain::design::search::{STARTS_THAT_MUST_AGREE, Silent, design};
use serde_json::{Value, json};

/// Allowed shortfall below the best known score (units of the observable).
const WITHIN: f64 = 2e-3;

fn reference(file: &str, problem: &str) -> Value {
    let path = format!("{}/tests/data/{file}", env!("CARGO_MANIFEST_DIR"));
    let all: Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    all["problems"][problem].clone()
}

/// Best known full score: the reference's own finite-pulse optimum, or a better design it scored.
fn best_known(file: &str, problem: &str) -> f64 {
    let r = reference(file, problem);
    let own = r.get("finite_pulses").or(r.get("finite_pulse")).and_then(|f| f["best_score"].as_f64()).expect("finite-pulse best score");
    r["best_known"]["score"].as_f64().unwrap_or(own).max(own)
}

/// The objective of a linear reference problem (`n2_300k_N`, `co2_20k_N`), default search.
fn linear_objective(problem: &str, seed: u64) -> Objective {
    let (family, n) = problem.rsplit_once('_').unwrap();
    let n: usize = n.parse().unwrap();
    let mut o = match family {
        "n2_300k" => json!({
            "molecule": {"name": "N2-like", "b_cm": 1.98958, "d_cm": 5.76e-6, "alpha_parallel_a3": 2.38, "alpha_perpendicular_a3": 1.45, "spin_weights": [2, 1]},
            "temperature_k": 300,
            "pulses": {"count": n, "fwhm_fs": 50, "delay_ps": {"min": 0.2, "max": 10.0}, "peak_intensity_wcm2": {"min": 0, "max": 5e13}},
            "max_peak_intensity_wcm2": 5e13, "min_separation_ps": 0.2,
            "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.05, 8.8], "step_fs": 20}
        }),
        "co2_20k" => json!({
            "molecule": {"name": "CO2-like", "b_cm": 0.39021, "d_cm": 1.333e-7, "alpha_parallel_a3": 4.038, "alpha_perpendicular_a3": 1.929, "spin_weights": [1, 0]},
            "temperature_k": 20,
            "pulses": {"count": n, "fwhm_fs": 100, "delay_ps": {"min": 0.3, "max": 45.0}, "peak_intensity_wcm2": {"min": 0, "max": 2e13}},
            "max_peak_intensity_wcm2": 2e13, "min_separation_ps": 0.3,
            "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.1, 45.0], "step_fs": 20}
        }),
        _ => unreachable!(),
    };
    if n == 1 {
        o["pulses"].as_object_mut().unwrap().remove("delay_ps");
    }
    o["search"] = json!({"seed": seed});
    Objective::from_json_str(&o.to_string(), problem).unwrap()
}

/// Design with the default search and check the score and the confidence report.
fn reaches_best(obj: &Objective, problem: &str, best: f64) {
    let r = design(obj, &Silent).unwrap();
    let got = r.best.full.value;
    let conf = r.best_confidence().expect("confidence of the chosen design");
    eprintln!(
        "{problem} seed {}: {got:.6} vs best known {best:.6} ({:+.6}); {} of {} starts agree; {} kick + {} full evaluations, {:.1} s",
        obj.search.seed,
        got - best,
        conf.agreeing,
        conf.starts.len(),
        r.kick_evaluations,
        r.full_evaluations,
        r.run_time_s
    );
    assert!(got >= best - WITHIN, "{problem} seed {}: {got} is more than {WITHIN} below the best known {best}", obj.search.seed);
    assert!(conf.agreeing >= STARTS_THAT_MUST_AGREE && conf.warning.is_none(), "{problem}: {conf:?}");
    // Every start was scored by the full solver, and none beats the reported design.
    assert!(conf.starts.iter().all(|s| s.full <= got + 1e-12));
}

#[test]
fn linear_designs_of_one_to_four_pulses_reach_the_best_known_design() {
    for problem in ["n2_300k_1", "n2_300k_2", "n2_300k_3", "n2_300k_4", "co2_20k_1", "co2_20k_2", "co2_20k_3", "co2_20k_4"] {
        let obj = linear_objective(problem, 1);
        reaches_best(&obj, problem, best_known("best_designs_linear.json", problem));
    }
}

#[test]
fn the_hardest_linear_designs_reach_the_best_known_design_for_other_seeds() {
    // Four pulses: for N2 the kick model and the full solver prefer different trains (half-revival vs
    // full-revival spacing, 8.7e-5 apart with real pulses); for CO2 six agreeing differential-evolution
    // runs of the reference missed a train 0.0087 better, which the reference's own scorer confirms.
    for (problem, seed) in [("n2_300k_4", 2), ("co2_20k_4", 3)] {
        let obj = linear_objective(problem, seed);
        reaches_best(&obj, problem, best_known("best_designs_linear.json", problem));
    }
}

#[test]
fn mixed_field_orientation_and_a_symmetric_top_reach_the_best_known_design() {
    // OCS at 1 K, two 1 ps pulses and a searched static field (the best field sits at its 30 kV/cm
    // bound and the best train kicks at far from the ceiling, 0.23 and 0.67 of it); CH3F at 5 K with
    // three 100 fs pulses (a local optimum 0.015 lower traps a third of the reference's own runs).
    // Both with effort "quick" to keep the test short; the normal effort finds the same designs.
    let ocs = json!({
        "molecule": {"name": "OCS-like", "b_cm": 0.20286, "d_cm": 4.342e-8, "alpha_parallel_a3": 7.933, "alpha_perpendicular_a3": 3.833, "dipole_debye": 0.7152},
        "temperature_k": 1.0, "static_field_kv_cm": {"min": 0, "max": 30},
        "pulses": {"count": 2, "fwhm_fs": 1000, "delay_ps": {"min": 2, "max": 85}, "peak_intensity_wcm2": {"min": 0, "max": 2e12}},
        "max_peak_intensity_wcm2": 2e12, "min_separation_ps": 2,
        "goal": {"kind": "peak", "observable": "cos", "window_ps": [2, 90], "step_fs": 100},
        "search": {"seed": 1, "effort": "quick"}
    });
    let ch3f = json!({
        "molecule": {"name": "CH3F-like", "a_cm": 5.182, "b_cm": 0.85179, "c_cm": 0.85179, "polarizability_a3": {"a": 3.24, "b": 2.84, "c": 2.84}, "spin_weights_by_k": [2, 1, 1]},
        "temperature_k": 5,
        "pulses": {"count": 3, "fwhm_fs": 100, "delay_ps": {"min": 0.5, "max": 20}, "peak_intensity_wcm2": {"min": 0, "max": 3e13}},
        "max_peak_intensity_wcm2": 3e13, "min_separation_ps": 0.5,
        "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.1, 20], "step_fs": 50},
        "search": {"seed": 1, "effort": "quick"}
    });
    for (text, problem) in [(ocs, "ocs_mixed_field_1k"), (ch3f, "ch3f_three_pulses_5k")] {
        let obj = Objective::from_json_str(&text.to_string(), problem).unwrap();
        reaches_best(&obj, problem, best_known("best_designs_polar_top.json", problem));
    }
}

#[test]
fn a_search_too_small_to_agree_says_so() {
    // One start with a tiny swarm cannot show agreement: the report must carry the warning, in the
    // summary as well.
    let mut obj = linear_objective("n2_300k_3", 1);
    obj.search.starts = Some(1);
    obj.search.swarm_size = Some(4);
    obj.search.iterations = Some(2);
    obj.search.refine_iterations = Some(2);
    let r = design(&obj, &Silent).unwrap();
    let conf = r.best_confidence().unwrap();
    assert_eq!((conf.agreeing, conf.starts.len()), (1, 1));
    let w = conf.warning.as_deref().expect("a warning");
    assert!(w.contains("may not have converged") && w.contains("only 1 of 1 starts") && w.contains("thorough"), "{w}");
    let summary = kicktrain::report::design::design_summary(&obj, &r);
    assert_eq!(summary["warnings"][0].as_str(), Some(w));
    assert_eq!(summary["search"]["confidence"]["converged"], json!(false));
}
