//! Performance figures (run with `cargo bench`). Prints medians from one run; machines are noisy,
//! so compare ratios, not absolute numbers.
//!
//! Job 1 (linear solver): the thermal alignment trace of the reference case n2like_300k_2d of
//! tools/reference/rotor_reference.py (N2-like constants, 300 K, one 50 fs Gaussian pulse at 5e13 W/cm²,
//! trace 0.2–11.98 ps every 20 fs, both ⟨cos²θ⟩ and ⟨cos²θ_2D⟩), compared with the stored
//! tests/data/reference_n2like_300k_2d.csv. With KICKTRAIN_BENCH_PEER=1 our plain numpy/scipy version of
//! the same trace, tools/reference/peer_timing.py (one solve_ivp per initial state, one process), is run
//! too (needs python3 with numpy and scipy) and the speed ratio is printed.
//!
//! KICKTRAIN_BENCH_JOBS picks jobs by number, e.g. `KICKTRAIN_BENCH_JOBS=2 cargo bench` for the
//! designer's kick-model throughput alone. Job 6 times whole designs with the default search: the
//! built-in objective and the three- and four-pulse N2 designs of `tests/best_designs.rs`. Job 7 (not
//! run by default, about four minutes) times a `limits` map: N2 at 300 K, counts 1–5, ceilings 1e13,
//! 2e13, 3e13, 5e13 and 8e13 W/cm², default search (KICKTRAIN_BENCH_LIMITS_EFFORT=quick for the quick one).

use kicktrain::field::{FieldModel, Pulse, PulsePolarization};
use kicktrain::molecule::Molecule;
use kicktrain::scenario::SolverSettings;
use kicktrain::simulate::Solver;
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn peer_job() {
    let mol = Molecule::linear("N2-like (reference constants)", 1.98958, 5.76e-6, 1.93, 1.0, [2.0, 1.0]);
    let field = FieldModel { pulses: vec![Pulse::gaussian(0.0, 50.0, 5e13)], static_field: None, ..Default::default() };
    let times: Vec<f64> = (0..590).map(|i| 0.2 + i as f64 * 0.02).collect();
    let mut runs = vec![];
    let mut last = None;
    for _ in 0..21 {
        let t0 = Instant::now();
        // A fresh solver each time: ensemble, operators, propagation and traces are all timed.
        let solver = Solver::new(&mol, 300.0, SolverSettings::default()).unwrap();
        let r = solver.run(&field, &times, true).unwrap();
        runs.push(t0.elapsed().as_secs_f64());
        last = Some((r, solver.initial_states()));
    }
    let (r, states) = last.unwrap();
    let ms = median(runs) * 1e3;
    // Agreement with the stored reference trace (tools/reference/rotor_reference.py n2like_300k_2d).
    let text = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/reference_n2like_300k_2d.csv")).unwrap();
    let mut worst: f64 = 0.0;
    for (i, line) in text.lines().filter(|l| !l.starts_with('#')).skip(1).enumerate() {
        let v: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        worst = worst.max((v[1] - r.trace.cos2[i]).abs()).max((v[2] - r.trace.cos2_2d().unwrap()[i]).abs());
    }
    println!("linear solver, N2 300 K, 50 fs at 5e13 W/cm², 590 samples ({states} initial states)");
    println!("  kicktrain median of 21 runs: {ms:.1} ms; max |difference| from the reference trace: {worst:.1e}");
    if std::env::var("KICKTRAIN_BENCH_PEER").is_ok() {
        // The script checks its own trace against the stored reference (exit status 1 above 1e-5).
        let script = concat!(env!("CARGO_MANIFEST_DIR"), "/tools/reference/peer_timing.py");
        let t0 = Instant::now();
        let ok = std::process::Command::new("python3").arg(script).output().map(|o| o.status.success()).unwrap_or(false);
        let peer = t0.elapsed().as_secs_f64();
        if ok {
            println!(
                "  our numpy/scipy reference (tools/reference/peer_timing.py, whole process) on this machine: {peer:.2} s; ratio reference / kicktrain = {:.0}×",
                peer * 1e3 / ms
            );
        } else {
            println!("  tools/reference/peer_timing.py could not run or disagreed (needs python3 with numpy and scipy)");
        }
    }
}

/// Job 2 (designer inner loop): kick-model objective evaluations of a four-pulse train for nitrogen at
/// 300 K (goal: peak ⟨cos²θ⟩ in 0.05–9 ps after the last pulse, 20 fs grid), on both cores.
fn kick_evaluations() {
    use kicktrain::design::Objective;
    use kicktrain::design::search::evaluate_kick_many;
    use rayon::prelude::*;
    let text = r#"{"molecule": "N2", "temperature_k": 300,
        "pulses": {"count": 4, "fwhm_fs": 50, "delay_ps": {"min": 0.2, "max": 9.0}, "peak_intensity_wcm2": {"min": 0, "max": 4e13}},
        "max_peak_intensity_wcm2": 4e13, "goal": {"kind": "peak", "window_ps": [0.05, 9.0], "step_fs": 20}}"#;
    let obj = Objective::from_json_str(text, "bench").unwrap();
    let d = obj.space.dims();
    let points: Vec<Vec<f64>> = (0..2000).map(|i| (0..d).map(|k| ((i * 7919 + k * 104729) % 1000) as f64 / 1000.0).collect()).collect();
    let fields: Vec<_> = points.iter().map(|u| obj.space.field(u)).collect();
    let _ = fields.par_iter().take(50).count();
    let mut rates = vec![];
    for _ in 0..5 {
        let t0 = Instant::now();
        let scores = evaluate_kick_many(&obj, &fields).unwrap();
        let el = t0.elapsed().as_secs_f64();
        assert_eq!(scores.len(), fields.len());
        rates.push(fields.len() as f64 / el);
    }
    println!("designer kick model, N2 300 K, four pulses, {d} parameters");
    println!("  median of 5 batches of {}: {:.0} evaluations/s", fields.len(), median(rates));
}

/// Job 3 (orientation): mixed-field orientation of OCS at 1 K through a 10 ns Gaussian pulse
/// (5e11 W/cm²) in a 10 kV/cm static field, full time-dependent solution over ±27.5 ns.
fn nanosecond_mixed_field() {
    use kicktrain::field::StaticField;
    let mol = Molecule::from_library("OCS", "bench").unwrap();
    let field = FieldModel {
        pulses: vec![Pulse::gaussian(0.0, 10_000_000.0, 5e11)],
        static_field: Some(StaticField { strength_kv_cm: 10.0, angle_deg: 0.0, on_ps: None, off_ps: None }),
        ..Default::default()
    };
    let t0 = Instant::now();
    let solver = Solver::new(&mol, 1.0, SolverSettings::default()).unwrap();
    let r = solver.run(&field, &[0.0, 30_000.0], false).unwrap();
    println!("mixed-field orientation, OCS 1 K, 10 ns pulse at 5e11 W/cm² in 10 kV/cm");
    println!(
        "  one run: {:.1} s; at the peak ⟨cos²θ⟩ = {:.4}, ⟨cosθ⟩ = {:.4}; after the pulse ⟨cosθ⟩ = {:.4}",
        t0.elapsed().as_secs_f64(),
        r.trace.cos2[0],
        r.trace.cos().unwrap()[0],
        r.trace.cos().unwrap()[1]
    );
}

fn main() {
    // `cargo bench` passes --bench; `cargo test --benches` would pass nothing: run only under bench.
    if !std::env::args().any(|a| a == "--bench") {
        return;
    }
    // KICKTRAIN_BENCH_JOBS picks jobs by number (comma-separated, default all six).
    let jobs = std::env::var("KICKTRAIN_BENCH_JOBS").unwrap_or_else(|_| "1,2,3,4,5,6".into());
    let wanted = |n: &str| jobs.split(',').any(|j| j.trim() == n);
    if wanted("1") {
        peer_job();
    }
    if wanted("2") {
        kick_evaluations();
    }
    if wanted("3") {
        nanosecond_mixed_field();
    }
    if wanted("4") {
        asymmetric_top();
    }
    if wanted("5") {
        three_axis();
    }
    if wanted("6") {
        designs();
    }
    if wanted("7") {
        limits_map();
    }
}

/// Job 7 (limits): a 5 × 5 map of the built-in objective (N2 at 300 K, 50 fs pulses), counts 1–5 and five
/// ceilings, one run.
fn limits_map() {
    use kicktrain::design::{Effort, Objective};
    use kicktrain::limits::{LimitsPlan, Quiet, limits};
    let text = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/objectives/two-pulse-room-temperature.json")).unwrap();
    let mut obj = Objective::from_json_str(&text, "two-pulse-room-temperature.json").unwrap();
    if let Ok(e) = std::env::var("KICKTRAIN_BENCH_LIMITS_EFFORT") {
        obj.search.effort = Effort::parse(&e).expect("quick, normal or thorough");
    }
    let plan = LimitsPlan { max_count: 5, ceilings_wcm2: vec![1e13, 2e13, 3e13, 5e13, 8e13], temperatures_k: vec![], durations_fs: vec![] };
    let t0 = Instant::now();
    let map = limits(&obj, &plan, &Quiet).unwrap();
    let agreeing = map.cells.iter().filter(|c| c.confidence.warning.is_none()).count();
    let top = map.cell(0, 4, 5).map(|c| c.design.full.value).unwrap_or(f64::NAN);
    println!(
        "limits map, N2 at 300 K, counts 1–5 × 5 ceilings ({} effort): {:.1} s on {} threads; {} of {} designs with three agreeing starts; 5 pulses at 8e13: {top:.5}",
        obj.search.effort.name(),
        t0.elapsed().as_secs_f64(),
        rayon::current_num_threads(),
        agreeing,
        map.cells.len()
    );
}

/// Job 6 (designer): whole designs with the default search, one run each (seed 1): the built-in
/// objective, and three and four 50 fs pulses on N2-like molecules at 300 K (the problems of
/// `tests/best_designs.rs`, best known 0.594858 and 0.648097).
fn designs() {
    use kicktrain::design::Objective;
    use kicktrain::design::search::{Silent, design};
    let builtin = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/objectives/two-pulse-room-temperature.json")).unwrap();
    let n2 = |n: usize| {
        format!(
            r#"{{"molecule": {{"name": "N2-like", "b_cm": 1.98958, "d_cm": 5.76e-6, "alpha_parallel_a3": 2.38, "alpha_perpendicular_a3": 1.45, "spin_weights": [2, 1]}},
            "temperature_k": 300, "pulses": {{"count": {n}, "fwhm_fs": 50, "delay_ps": {{"min": 0.2, "max": 10.0}}, "peak_intensity_wcm2": {{"min": 0, "max": 5e13}}}},
            "max_peak_intensity_wcm2": 5e13, "min_separation_ps": 0.2, "goal": {{"kind": "peak", "observable": "cos2", "window_ps": [0.05, 8.8], "step_fs": 20}}}}"#
        )
    };
    println!("designs with the default search (seed 1)");
    for (name, text) in
        [("built-in objective (two pulses, N2 at 300 K)", builtin), ("three 50 fs pulses, N2-like 300 K", n2(3)), ("four 50 fs pulses, N2-like 300 K", n2(4))]
    {
        let obj = Objective::from_json_str(&text, name).unwrap();
        let t0 = Instant::now();
        let r = design(&obj, &Silent).unwrap();
        let c = r.best_confidence().unwrap();
        println!(
            "  {name}: {:.1} s, score {:.6}; {} of {} starts agree; {} kick-model and {} full-solver evaluations",
            t0.elapsed().as_secs_f64(),
            r.best.full.value,
            c.agreeing,
            c.starts.len(),
            r.kick_evaluations,
            r.full_evaluations
        );
    }
}

/// Job 5 (3D alignment): the asymmetric top of job 4, one 1 ps pulse polarized elliptically (major axis
/// Z, ellipticity 0.5), trace 0–400 ps every 200 fs, at the temperatures in KICKTRAIN_BENCH_3D_K
/// (default "1") and peak intensities in KICKTRAIN_BENCH_3D_I (W/cm², default "5e11"), without and with
/// ⟨cos²θ_2D⟩ (KICKTRAIN_BENCH_3D_2D, default "0,1"); prints where the time goes.
fn three_axis() {
    let top = kicktrain::molecule::top::Top::rigid(0.19, 0.025, 0.022, [20.0, 12.0, 9.0]);
    let mol = Molecule::from_top("benchmark top", top, 0.0, None);
    let times: Vec<f64> = (0..=2000).map(|i| i as f64 * 0.2).collect();
    let list = |key: &str, default: &str| -> Vec<f64> {
        std::env::var(key).unwrap_or_else(|_| default.into()).split(',').filter_map(|x| x.trim().parse::<f64>().ok()).collect()
    };
    println!("asymmetric top (0.19, 0.025, 0.022) cm⁻¹, one elliptical (0.5) 1 ps pulse, 0–400 ps every 200 fs, all nine ⟨cos²⟩ (and ⟨cos²θ_2D⟩)");
    for intensity in list("KICKTRAIN_BENCH_3D_I", "5e11") {
        let pulse = Pulse { polarization: PulsePolarization { angle_deg: 0.0, ellipticity: 0.5 }, ..Pulse::gaussian(0.0, 1000.0, intensity) };
        let field = FieldModel { pulses: vec![pulse], ..Default::default() };
        for (t, with_2d) in
            list("KICKTRAIN_BENCH_3D_K", "1").into_iter().flat_map(|t| list("KICKTRAIN_BENCH_3D_2D", "0,1").into_iter().map(move |d| (t, d != 0.0)))
        {
            let t0 = Instant::now();
            let solver = Solver::new(&mol, t, SolverSettings::default()).unwrap();
            let r = solver.run(&field, &times, with_2d).unwrap();
            let secs = t0.elapsed().as_secs_f64();
            let tm = solver.lab_timing().unwrap_or_default();
            let col = |n: &str| r.trace.lab_axes.iter().find(|c| c.name == n).map(|c| c.values.iter().cloned().fold(0.0, f64::max)).unwrap_or(f64::NAN);
            let j = r.blocks.iter().map(|b| b.j_max).max().unwrap_or(0);
            let size = r.blocks.iter().map(|b| b.size).max().unwrap_or(0);
            println!(
                "  {intensity:.0e} W/cm², {t} K{}: {secs:.1} s ({} initial states, largest block {size} states up to J = {j}); thread-seconds: propagation {:.1}, observables {:.1}; coherence sums {:.1} s; {} chunks started again ({:.1} thread-s lost); peaks ⟨cos²θ_Za⟩ {:.4}, ⟨cos²θ_Xb⟩ {:.4}, ⟨cos²θ_Yc⟩ {:.4}{}",
                if with_2d { " with 2D" } else { "" },
                solver.initial_states(),
                tm.propagate_cpu_s,
                tm.observe_cpu_s,
                tm.sums_s,
                tm.retries,
                tm.retry_cpu_s,
                col("cos2_Za"),
                col("cos2_Xb"),
                col("cos2_Yc"),
                if with_2d { format!(", ⟨cos²θ_2D⟩ {:.4}", r.trace.cos2_2d().unwrap().iter().cloned().fold(0.0, f64::max)) } else { String::new() }
            );
        }
    }
}

/// Job 4 (tops): an asymmetric top near (A, B, C) = (0.19, 0.025, 0.022) cm⁻¹ with α = (20, 12, 9) Å³,
/// one 1 ps pulse at 2e12 W/cm², trace 0–400 ps every 200 fs with ⟨cos²θ_2D⟩, at the temperatures in
/// KICKTRAIN_BENCH_TOP_K (comma-separated, default "1"; each run takes minutes). One run per temperature.
fn asymmetric_top() {
    let top = kicktrain::molecule::top::Top::rigid(0.19, 0.025, 0.022, [20.0, 12.0, 9.0]);
    let mol = Molecule::from_top("benchmark top", top, 0.0, None);
    let field = FieldModel { pulses: vec![Pulse::gaussian(0.0, 1000.0, 2e12)], ..Default::default() };
    let times: Vec<f64> = (0..=2000).map(|i| i as f64 * 0.2).collect();
    let temps = std::env::var("KICKTRAIN_BENCH_TOP_K").unwrap_or_else(|_| "1".into());
    println!("asymmetric top (0.19, 0.025, 0.022) cm⁻¹, 1 ps at 2e12 W/cm², 0–400 ps every 200 fs with 2D");
    for t in temps.split(',').filter_map(|x| x.trim().parse::<f64>().ok()) {
        let t0 = Instant::now();
        let solver = Solver::new(&mol, t, SolverSettings::default()).unwrap();
        let r = solver.run(&field, &times, true).unwrap();
        let secs = t0.elapsed().as_secs_f64();
        let peak = r.trace.cos2.iter().cloned().fold(0.0, f64::max);
        let j = r.blocks.iter().map(|b| b.j_max).max().unwrap_or(0);
        println!("  {t} K: {secs:.1} s ({} initial states, {} blocks, basis up to J = {j}; peak ⟨cos²θ_a⟩ {peak:.4})", solver.initial_states(), r.blocks.len());
    }
}
