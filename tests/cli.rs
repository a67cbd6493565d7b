//! Integration tests that drive the built `kicktrain` binary: bad input must fail cleanly (exit code 2,
//! a single "error: ..." line naming the offending field, nothing written, no panic), and the basic
//! commands must work and write well-formed output.

use serde_json::{Value, json};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_kicktrain");

/// A fresh, uniquely named scratch folder under the system temp dir, removed when dropped.
struct Sandbox {
    dir: PathBuf,
}

impl Sandbox {
    fn new(tag: &str) -> Sandbox {
        static COUNTER: AtomicUsize = AtomicUsize::new(0);
        let n = COUNTER.fetch_add(1, Ordering::SeqCst);
        let nanos = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_nanos()).unwrap_or(0);
        let dir = std::env::temp_dir().join(format!("kicktrain-cli-{tag}-{}-{n}-{nanos}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("create sandbox");
        Sandbox { dir }
    }

    /// Write `text` to a file in the sandbox and return its path.
    fn write(&self, name: &str, text: &str) -> PathBuf {
        let p = self.dir.join(name);
        std::fs::write(&p, text).expect("write input");
        p
    }

    /// The output folder the program is pointed at (never created by the test itself).
    fn out(&self) -> PathBuf {
        self.dir.join("out")
    }
}

impl Drop for Sandbox {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.dir);
    }
}

/// What one run of the binary produced.
struct Run {
    code: Option<i32>,
    stdout: String,
    stderr: String,
    elapsed: Duration,
}

/// Run the binary with `args`, capturing stdout/stderr through files (no pipe deadlock on large output)
/// and killing it if it runs longer than `limit`.
fn run_with_limit(args: &[&str], limit: Duration) -> Run {
    run_with_env(args, &[], limit)
}

/// `run_with_limit` with extra environment variables.
fn run_with_env(args: &[&str], env: &[(&str, &str)], limit: Duration) -> Run {
    let scratch = Sandbox::new("io");
    let so = scratch.dir.join("stdout");
    let se = scratch.dir.join("stderr");
    let start = Instant::now();
    let mut child = Command::new(BIN)
        .args(args)
        .envs(env.iter().copied())
        .stdin(Stdio::null())
        .stdout(std::fs::File::create(&so).expect("stdout file"))
        .stderr(std::fs::File::create(&se).expect("stderr file"))
        .spawn()
        .expect("spawn kicktrain");
    let status = loop {
        if let Some(s) = child.try_wait().expect("wait") {
            break s;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("kicktrain {args:?} did not finish within {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(10));
    };
    let elapsed = start.elapsed();
    Run { code: status.code(), stdout: std::fs::read_to_string(&so).unwrap_or_default(), stderr: std::fs::read_to_string(&se).unwrap_or_default(), elapsed }
}

fn run(args: &[&str]) -> Run {
    run_with_limit(args, Duration::from_secs(120))
}

fn s(p: &Path) -> &str {
    p.to_str().expect("utf-8 temp path")
}

/// The failure contract for bad input (common practice for CLIs): exit code 2, stderr exactly one line
/// "error: ..." that contains `needle` (usually the field path), nothing on stdout, no panic, and the
/// output folder never created.
fn assert_clean_input_error(r: &Run, out: &Path, needle: &str) {
    let ctx = format!("exit {:?}\n--- stdout ---\n{}\n--- stderr ---\n{}", r.code, r.stdout, r.stderr);
    assert!(!r.stderr.contains("panicked"), "panic instead of an error\n{ctx}");
    assert_eq!(r.code, Some(2), "expected exit code 2\n{ctx}");
    let lines: Vec<&str> = r.stderr.lines().collect();
    assert_eq!(lines.len(), 1, "expected exactly one line on stderr\n{ctx}");
    assert!(lines[0].starts_with("error: "), "stderr must start with \"error: \"\n{ctx}");
    assert!(lines[0].contains(needle), "error should mention {needle:?}\n{ctx}");
    assert!(r.stdout.trim().is_empty(), "nothing should be printed on stdout for bad input\n{ctx}");
    assert!(!out.exists(), "output folder {} must not be created on an error\n{ctx}", out.display());
}

/// Like `assert_clean_input_error`, and the message must start with "error: FIELD:" (the field path first).
fn assert_field_error(r: &Run, out: &Path, field: &str) {
    assert_clean_input_error(r, out, field);
    let prefix = format!("error: {field}:");
    assert!(r.stderr.starts_with(&prefix), "error should start with {prefix:?}, got {:?}", r.stderr);
}

// ---------------------------------------------------------------------------------------------------
// Scenarios (`kicktrain simulate`)
// ---------------------------------------------------------------------------------------------------

/// A small, valid scenario used as the base of every bad-scenario case.
fn good_scenario() -> Value {
    json!({
        "molecule": "N2",
        "temperature_k": 300,
        "pulses": [{"center_ps": 0.0, "fwhm_fs": 50, "peak_intensity_wcm2": 5e13}],
        "window": {"start_ps": 0.2, "stop_ps": 12.0, "step_fs": 20}
    })
}

/// A cheap scenario for the good paths: cold N2, one weak 100 fs pulse, a short coarse window.
fn cheap_scenario() -> Value {
    json!({
        "molecule": "N2",
        "temperature_k": 10,
        "pulses": [{"center_ps": 0.0, "fwhm_fs": 100, "peak_intensity_wcm2": 1e13}],
        "window": {"start_ps": 0.0, "stop_ps": 2.0, "step_fs": 50}
    })
}

/// Run `simulate` on a scenario value and return the run (for custom checks).
fn simulate_value(tag: &str, v: &Value) -> (Run, Sandbox) {
    let sb = Sandbox::new(tag);
    let input = sb.write("scenario.json", &v.to_string());
    let out = sb.out();
    let r = run(&["simulate", s(&input), "--out", s(&out)]);
    (r, sb)
}

fn simulate_fails_on(tag: &str, v: &Value, field: &str) {
    let (r, sb) = simulate_value(tag, v);
    assert_field_error(&r, &sb.out(), field);
}

// Sanity check of the base used below: the unmodified scenario is accepted (parse only; we do not
// run the 300 K case here, that is covered by the library tests).
#[test]
fn scenario_base_for_bad_cases_is_itself_valid() {
    // Checks that failures below come from the one change made, not from a broken base.
    let v = good_scenario();
    kicktrain::scenario::Scenario::from_json_str(&v.to_string(), "base").expect("base scenario parses");
}

#[test]
fn scenario_unknown_top_level_key() {
    // Checks: a misspelled or extra top-level key is rejected and named, not silently ignored.
    let mut v = good_scenario();
    v["temprature"] = json!(300);
    simulate_fails_on("unknown-top", &v, "temprature");
    let (r, _sb) = simulate_value("unknown-top2", &v);
    assert!(r.stderr.contains("unknown key"), "{}", r.stderr);
}

#[test]
fn scenario_unknown_pulse_key() {
    // Checks: an unknown key inside a pulse is named with its full path.
    let mut v = good_scenario();
    v["pulses"][0]["polarization_deg"] = json!(30);
    simulate_fails_on("unknown-pulse", &v, "pulses[0].polarization_deg");
}

#[test]
fn scenario_focus_key_without_energy() {
    // Checks: a focusing key next to a peak intensity is refused, naming that key.
    let mut v = good_scenario();
    v["pulses"][0]["wavelength_nm"] = json!(800);
    simulate_fails_on("focus-without-energy", &v, "pulses[0].wavelength_nm");
}

#[test]
fn scenario_missing_molecule() {
    // Checks: a required field that is absent is named ("molecule") and reported as missing.
    let mut v = good_scenario();
    v.as_object_mut().unwrap().remove("molecule");
    simulate_fails_on("missing-molecule", &v, "molecule");
    let (r, _sb) = simulate_value("missing-molecule2", &v);
    assert!(r.stderr.contains("missing"), "{}", r.stderr);
}

#[test]
fn scenario_missing_window() {
    // Checks: the required window object, when absent, is named.
    let mut v = good_scenario();
    v.as_object_mut().unwrap().remove("window");
    simulate_fails_on("missing-window", &v, "window");
}

#[test]
fn scenario_wrong_type_string_for_number() {
    // Checks: a string where a number is expected is rejected with the field path (no coercion).
    let mut v = good_scenario();
    v["pulses"][0]["fwhm_fs"] = json!("50");
    simulate_fails_on("wrong-type", &v, "pulses[0].fwhm_fs");
    let mut v = good_scenario();
    v["temperature_k"] = json!("300");
    simulate_fails_on("wrong-type-t", &v, "temperature_k");
}

#[test]
fn scenario_negative_temperature() {
    // Checks: a negative absolute temperature is rejected.
    let mut v = good_scenario();
    v["temperature_k"] = json!(-1.0);
    simulate_fails_on("neg-temp", &v, "temperature_k");
}

#[test]
fn scenario_number_beyond_f64_range() {
    // Checks: a literal beyond the f64 range (1e400) never becomes an infinity that reaches the solver:
    // the run fails cleanly with exit 2. serde_json rejects it while parsing ("number out of range"),
    // so the message names the file and position rather than the field; either is accepted here.
    let text = good_scenario().to_string().replace("\"temperature_k\":300", "\"temperature_k\":1e400");
    assert!(text.contains("1e400"), "substitution failed: {text}");
    let sb = Sandbox::new("huge");
    let input = sb.write("scenario.json", &text);
    let out = sb.out();
    let r = run(&["simulate", s(&input), "--out", s(&out)]);
    assert_clean_input_error(&r, &out, "error: ");
    assert!(
        r.stderr.contains("temperature_k") || r.stderr.contains("out of range"),
        "error should name the field or say the number is out of range: {}",
        r.stderr
    );

    // The same literal in a pulse field.
    let text = r#"{"molecule":"N2","temperature_k":300,
        "pulses":[{"center_ps":0.0,"fwhm_fs":50,"peak_intensity_wcm2":1e400}],
        "window":{"start_ps":0.2,"stop_ps":12.0,"step_fs":20}}"#;
    let sb = Sandbox::new("huge2");
    let input = sb.write("scenario.json", text);
    let out = sb.out();
    let r = run(&["simulate", s(&input), "--out", s(&out)]);
    assert_clean_input_error(&r, &out, "error: ");
    assert!(
        r.stderr.contains("peak_intensity_wcm2") || r.stderr.contains("out of range"),
        "error should name the field or say the number is out of range: {}",
        r.stderr
    );
}

#[test]
fn scenario_huge_but_finite_values_are_bounded() {
    // Checks: finite but absurd magnitudes are refused by range checks, not fed to the solver.
    let mut v = good_scenario();
    v["temperature_k"] = json!(1e300);
    simulate_fails_on("huge-temp", &v, "temperature_k");
    let mut v = good_scenario();
    v["pulses"][0]["peak_intensity_wcm2"] = json!(1e300);
    simulate_fails_on("huge-int", &v, "pulses[0].peak_intensity_wcm2");
    let mut v = good_scenario();
    v["pulses"][0]["fwhm_fs"] = json!(1e300);
    simulate_fails_on("huge-fwhm", &v, "pulses[0].fwhm_fs");
    let mut v = good_scenario();
    v["window"]["step_fs"] = json!(1e-300);
    simulate_fails_on("tiny-step", &v, "window.step_fs");
}

#[test]
fn scenario_zero_fwhm() {
    // Checks: a pulse of zero duration is rejected.
    let mut v = good_scenario();
    v["pulses"][0]["fwhm_fs"] = json!(0);
    simulate_fails_on("zero-fwhm", &v, "pulses[0].fwhm_fs");
}

#[test]
fn scenario_negative_intensity() {
    // Checks: a negative peak intensity is rejected.
    let mut v = good_scenario();
    v["pulses"][0]["peak_intensity_wcm2"] = json!(-5e13);
    simulate_fails_on("neg-int", &v, "pulses[0].peak_intensity_wcm2");
}

#[test]
fn scenario_window_stop_before_start() {
    // Checks: a window that ends before it starts is rejected and the stop time is named.
    let mut v = good_scenario();
    v["window"]["stop_ps"] = json!(0.1);
    simulate_fails_on("stop-before-start", &v, "window.stop_ps");
    let mut v = good_scenario();
    v["window"]["stop_ps"] = json!(0.2);
    simulate_fails_on("stop-equals-start", &v, "window.stop_ps");
}

#[test]
fn scenario_zero_step() {
    // Checks: a zero sampling step (an endless window) is rejected.
    let mut v = good_scenario();
    v["window"]["step_fs"] = json!(0);
    simulate_fails_on("zero-step", &v, "window.step_fs");
}

#[test]
fn scenario_unknown_molecule_suggests_near_name() {
    // Checks: an unknown library name is named and the message suggests the nearest real name.
    let mut v = good_scenario();
    v["molecule"] = json!("N3");
    simulate_fails_on("n3", &v, "molecule");
    let (r, _sb) = simulate_value("n3b", &v);
    assert!(r.stderr.contains("N3"), "the error should quote the bad name: {}", r.stderr);
    assert!(r.stderr.contains("N2"), "the error should suggest N2: {}", r.stderr);
}

fn inline_molecule() -> Value {
    json!({"name": "test", "b_cm": 2.0, "alpha_parallel_a3": 2.4, "alpha_perpendicular_a3": 1.5, "spin_weights": [2, 1]})
}

#[test]
fn scenario_inline_molecule_missing_b() {
    // Checks: an inline molecule without its rotational constant names molecule.b_cm.
    let mut m = inline_molecule();
    m.as_object_mut().unwrap().remove("b_cm");
    let mut v = good_scenario();
    v["molecule"] = m;
    simulate_fails_on("inline-no-b", &v, "molecule.b_cm");
}

#[test]
fn scenario_inline_molecule_negative_alpha() {
    // Checks: a negative polarizability volume is rejected with its path.
    let mut m = inline_molecule();
    m["alpha_parallel_a3"] = json!(-2.4);
    let mut v = good_scenario();
    v["molecule"] = m;
    simulate_fails_on("inline-neg-alpha", &v, "molecule.alpha_parallel_a3");
    let mut m = inline_molecule();
    m["alpha_perpendicular_a3"] = json!(-1.0);
    let mut v = good_scenario();
    v["molecule"] = m;
    simulate_fails_on("inline-neg-alpha-perp", &v, "molecule.alpha_perpendicular_a3");
}

#[test]
fn scenario_inline_molecule_zero_spin_weights() {
    // Checks: spin weights that remove every level ([0, 0]) are rejected.
    let mut m = inline_molecule();
    m["spin_weights"] = json!([0, 0]);
    let mut v = good_scenario();
    v["molecule"] = m;
    simulate_fails_on("spin00", &v, "molecule.spin_weights");
}

#[test]
fn scenario_unknown_pulse_shape() {
    // Checks: an unsupported envelope name is rejected, with the accepted names in the message.
    let mut v = good_scenario();
    v["pulses"][0]["shape"] = json!("triangle");
    simulate_fails_on("triangle", &v, "pulses[0].shape");
    let (r, _sb) = simulate_value("triangle2", &v);
    assert!(r.stderr.contains("gaussian"), "the error should list the accepted shapes: {}", r.stderr);
}

#[test]
fn scenario_flat_top_rise_longer_than_fwhm() {
    // Checks: a flat-top pulse whose edges are longer than the pulse itself is rejected.
    let mut v = good_scenario();
    v["pulses"][0]["shape"] = json!("flat_top");
    v["pulses"][0]["fwhm_fs"] = json!(100);
    v["pulses"][0]["rise_fs"] = json!(150);
    simulate_fails_on("flat-rise", &v, "pulses[0].rise_fs");
}

#[test]
fn scenario_bad_solver_and_goal_sections() {
    // Checks: errors inside the optional solver and goal objects carry their full path.
    let mut v = good_scenario();
    v["solver"] = json!({"method": "exact"});
    simulate_fails_on("solver-method", &v, "solver.method");
    let mut v = good_scenario();
    v["solver"] = json!({"thermal_tolerance": 0.5});
    simulate_fails_on("solver-tol", &v, "solver.thermal_tolerance");
    let mut v = good_scenario();
    v["goal"] = json!({"kind": "best", "window_ps": [0.1, 9.0]});
    simulate_fails_on("scenario-goal", &v, "goal.kind");
}

#[test]
fn scenario_not_json() {
    // Checks: a file that is not JSON is reported against the file name, in one line.
    let sb = Sandbox::new("not-json");
    let input = sb.write("scenario.json", "molecule = N2\ntemperature_k = 300\n");
    let out = sb.out();
    let r = run(&["simulate", s(&input), "--out", s(&out)]);
    assert_clean_input_error(&r, &out, s(&input));
    assert!(r.stderr.contains("JSON"), "{}", r.stderr);
}

#[test]
fn scenario_top_level_not_an_object() {
    // Checks: valid JSON of the wrong shape (an array) is a clean input error.
    let sb = Sandbox::new("array");
    let input = sb.write("scenario.json", "[1, 2, 3]");
    let out = sb.out();
    let r = run(&["simulate", s(&input), "--out", s(&out)]);
    assert_clean_input_error(&r, &out, "object");
}

#[test]
fn scenario_empty_file() {
    // Checks: an empty file is a clean input error naming the file.
    let sb = Sandbox::new("empty");
    let input = sb.write("scenario.json", "");
    let out = sb.out();
    let r = run(&["simulate", s(&input), "--out", s(&out)]);
    assert_clean_input_error(&r, &out, s(&input));
}

#[test]
fn scenario_nonexistent_file() {
    // Checks: a path that does not exist gives exit 2 and names the path.
    let sb = Sandbox::new("nofile");
    let input = sb.dir.join("does-not-exist.json");
    let out = sb.out();
    let r = run(&["simulate", s(&input), "--out", s(&out)]);
    assert_clean_input_error(&r, &out, s(&input));
}

#[test]
fn bad_scenario_leaves_an_existing_out_dir_untouched() {
    // Checks: when --out already exists, an input error writes nothing into it.
    let sb = Sandbox::new("existing-out");
    let out = sb.out();
    std::fs::create_dir_all(&out).unwrap();
    let mut v = good_scenario();
    v["pulses"][0]["fwhm_fs"] = json!(0);
    let input = sb.write("scenario.json", &v.to_string());
    let r = run(&["simulate", s(&input), "--out", s(&out)]);
    assert_eq!(r.code, Some(2), "{}", r.stderr);
    let left: Vec<_> = std::fs::read_dir(&out).unwrap().collect();
    assert!(left.is_empty(), "files written despite the error: {left:?}");
}

// ---------------------------------------------------------------------------------------------------
// Objectives (`kicktrain design FILE --out DIR --quiet`)
// ---------------------------------------------------------------------------------------------------

/// A small, valid objective (cold N2, two pulses, a tiny search) used as the base of the bad cases.
fn good_objective() -> Value {
    json!({
        "molecule": "N2",
        "temperature_k": 10,
        "pulses": {
            "count": 2,
            "fwhm_fs": 100,
            "delay_ps": {"min": 0.2, "max": 2.0},
            "peak_intensity_wcm2": {"min": 0, "max": 1e13}
        },
        "max_peak_intensity_wcm2": 1e13,
        "min_separation_ps": 0.2,
        "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.05, 2.0], "step_fs": 50},
        "search": {"seed": 1, "swarm_size": 2, "iterations": 1, "starts": 1, "refine_candidates": 1, "refine_iterations": 0}
    })
}

fn design_value(tag: &str, v: &Value, limit: Duration) -> (Run, Sandbox) {
    let sb = Sandbox::new(tag);
    let input = sb.write("objective.json", &v.to_string());
    let out = sb.out();
    let r = run_with_limit(&["design", s(&input), "--out", s(&out), "--quiet"], limit);
    (r, sb)
}

/// Infeasible or malformed objectives are rejected while reading, so a few seconds is ample.
fn design_fails_on(tag: &str, v: &Value, field: &str) -> Run {
    let (r, sb) = design_value(tag, v, Duration::from_secs(60));
    assert_field_error(&r, &sb.out(), field);
    r
}

#[test]
fn objective_bad_static_field_angle() {
    // Checks: a searched static-field angle without a static field and one outside ±360° fail with exit
    // code 2 naming static_field_angle_deg; nothing is written.
    let mut v = good_objective();
    v["molecule"] = json!("OCS");
    v["static_field_angle_deg"] = json!({"min": 0, "max": 90});
    design_fails_on("angle-without-field", &v, "static_field_angle_deg");
    v["static_field_kv_cm"] = json!(10);
    v["static_field_angle_deg"] = json!({"min": 0, "max": 900});
    design_fails_on("angle-range", &v, "static_field_angle_deg");
    // A ⟨cosθ_X⟩ goal needs a static field that can tilt towards X.
    v["molecule"] = json!("OCS");
    v["goal"]["observable"] = json!("cos_x");
    v["static_field_angle_deg"] = json!(0);
    design_fails_on("cos-x-along-z", &v, "goal.observable");
    v["static_field_angle_deg"] = json!(180);
    design_fails_on("cos-x-reversed", &v, "goal.observable");
}

#[test]
fn objective_base_for_bad_cases_is_itself_valid() {
    // Checks that failures below come from the one change made, not from a broken base.
    kicktrain::design::Objective::from_json_str(&good_objective().to_string(), "base").expect("base objective parses");
}

#[test]
fn objective_count_zero() {
    // Checks: a train of zero pulses is rejected.
    let mut v = good_objective();
    v["pulses"]["count"] = json!(0);
    design_fails_on("count0", &v, "pulses.count");
}

#[test]
fn objective_count_and_max_count() {
    // Checks: the two ways of giving the pulse count are mutually exclusive.
    let mut v = good_objective();
    v["pulses"]["max_count"] = json!(3);
    let r = design_fails_on("both-counts", &v, "pulses.max_count");
    assert!(r.stderr.contains("count"), "{}", r.stderr);
}

#[test]
fn objective_delay_max_below_min() {
    // Checks: inverted delay bounds are rejected and the max is named.
    let mut v = good_objective();
    v["pulses"]["delay_ps"] = json!({"min": 2.0, "max": 1.0});
    design_fails_on("delay-inverted", &v, "pulses.delay_ps.max");
}

#[test]
fn objective_delay_below_min_separation_is_infeasible_before_search() {
    // Checks: delay bounds that the minimum separation makes empty are reported as infeasible while
    // reading the file, before any search (so the run returns quickly).
    let mut v = good_objective();
    v["pulses"]["delay_ps"] = json!({"min": 0.1, "max": 0.3});
    v["min_separation_ps"] = json!(0.5);
    // A search big enough to take far longer than the limit if it were started.
    v["search"] = json!({"seed": 1, "swarm_size": 500, "iterations": 5000, "starts": 50, "refine_candidates": 50, "refine_iterations": 5000});
    let (r, sb) = design_value("delay-vs-sep", &v, Duration::from_secs(30));
    assert_clean_input_error(&r, &sb.out(), "delay_ps");
    assert!(r.stderr.contains("no feasible"), "expected \"no feasible\" wording: {}", r.stderr);
    assert!(r.elapsed < Duration::from_secs(20), "infeasibility should be found before any search, took {:?} (a search of this size takes minutes)", r.elapsed);
}

#[test]
fn objective_intensity_min_above_ceiling() {
    // Checks: a lower intensity bound above the global ceiling is infeasible and named.
    let mut v = good_objective();
    v["pulses"]["peak_intensity_wcm2"] = json!({"min": 2e13, "max": 3e13});
    let r = design_fails_on("int-above-ceiling", &v, "pulses.each[0].peak_intensity_wcm2");
    assert!(r.stderr.contains("no feasible"), "{}", r.stderr);
}

#[test]
fn objective_fluence_budget_below_minimum_pulses() {
    // Checks: a fluence budget smaller than the weakest allowed pulses need is infeasible and named.
    let mut v = good_objective();
    v["pulses"]["peak_intensity_wcm2"] = json!({"min": 5e12, "max": 1e13});
    v["max_total_fluence_jcm2"] = json!(1e-6);
    let r = design_fails_on("fluence", &v, "max_total_fluence_jcm2");
    assert!(r.stderr.contains("no feasible"), "{}", r.stderr);
}

#[test]
fn objective_unknown_goal_kind() {
    // Checks: an unsupported goal kind is rejected with the accepted kinds listed.
    let mut v = good_objective();
    v["goal"]["kind"] = json!("best");
    let r = design_fails_on("kind-best", &v, "goal.kind");
    assert!(r.stderr.contains("peak"), "{}", r.stderr);
}

#[test]
fn objective_value_at_without_time() {
    // Checks: a value_at goal needs its time at_ps.
    let mut v = good_objective();
    v["goal"] = json!({"kind": "value_at", "observable": "cos2"});
    design_fails_on("value-at", &v, "goal.at_ps");
}

#[test]
fn objective_goal_window_stop_not_after_start() {
    // Checks: a goal window with stop ≤ start is rejected.
    let mut v = good_objective();
    v["goal"]["window_ps"] = json!([2.0, 1.0]);
    design_fails_on("goal-window", &v, "goal.window_ps");
    let mut v = good_objective();
    v["goal"]["window_ps"] = json!([1.0, 1.0]);
    design_fails_on("goal-window-eq", &v, "goal.window_ps");
}

#[test]
fn objective_swarm_size_zero() {
    // Checks: a search with no particles is rejected.
    let mut v = good_objective();
    v["search"]["swarm_size"] = json!(0);
    design_fails_on("swarm0", &v, "search.swarm_size");
}

#[test]
fn objective_unknown_key() {
    // Checks: unknown keys in an objective are rejected like in a scenario.
    let mut v = good_objective();
    v["pulses"]["cuont"] = json!(2);
    design_fails_on("obj-unknown", &v, "pulses.cuont");
}

#[test]
fn objective_nonexistent_file() {
    // Checks: a missing objective file gives exit 2 and names the path.
    let sb = Sandbox::new("obj-nofile");
    let input = sb.dir.join("missing-objective.json");
    let out = sb.out();
    let r = run(&["design", s(&input), "--out", s(&out), "--quiet"]);
    assert_clean_input_error(&r, &out, s(&input));
}

// ---------------------------------------------------------------------------------------------------
// Good paths
// ---------------------------------------------------------------------------------------------------

#[test]
fn molecules_lists_the_library() {
    // Checks: `kicktrain molecules` succeeds and prints a table of at least 8 molecules, N2 among them.
    let r = run(&["molecules"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let mut lines = r.stdout.lines();
    let header = lines.next().expect("a header line");
    assert!(header.starts_with("name"), "unexpected header: {header}");
    let rows: Vec<&str> = lines.take_while(|l| !l.trim().is_empty()).collect();
    assert!(rows.len() >= 8, "expected at least 8 molecules, got {}:\n{}", rows.len(), r.stdout);
    assert!(rows.iter().any(|l| l.split_whitespace().next() == Some("N2")), "N2 missing:\n{}", r.stdout);
    assert!(!r.stdout.contains("NaN"), "{}", r.stdout);
}

#[test]
fn molecules_json_has_a_source_for_every_constant() {
    // Checks: `molecules --json` is valid JSON, the same names as the table, and every constant carries
    // a non-empty source.
    let r = run(&["molecules", "--json"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).expect("molecules --json prints JSON");
    let list = v["linear"].as_array().expect("a JSON array of linear molecules");
    assert!(list.len() >= 8, "expected at least 8 molecules, got {}", list.len());
    let table = run(&["molecules"]).stdout;
    for m in list {
        let name = m["name"].as_str().expect("every molecule has a name");
        assert!(table.lines().any(|l| l.split_whitespace().next() == Some(name)), "{name} missing from the table");
        for key in ["b_cm", "d_cm", "alpha_parallel_a3", "alpha_perpendicular_a3", "spin_weights"] {
            let c = &m[key];
            assert!(!c["value"].is_null(), "{name}.{key} has no value: {m}");
            let src = c["source"].as_str().unwrap_or("");
            assert!(!src.trim().is_empty(), "{name}.{key} has no source: {m}");
        }
        // Any other constant given as {value, source} must also carry a source.
        for (k, c) in m.as_object().unwrap() {
            if c.get("value").is_some() {
                assert!(c["source"].as_str().is_some_and(|t| !t.trim().is_empty()), "{name}.{k} has no source");
            }
        }
        // The polar molecules carry both hyperpolarizabilities, with their sources.
        if ["CO", "OCS", "N2O", "HCl"].contains(&name) {
            for key in ["dipole_debye", "beta_parallel_au", "beta_perpendicular_au"] {
                assert!(m[key]["value"].is_number(), "{name}.{key} missing: {m}");
            }
        }
    }
    // Tops: rotational constants and each polarizability component carry a source.
    let tops = v["tops"].as_array().expect("a JSON array of tops");
    assert!(tops.len() >= 7, "expected at least 7 tops, got {}", tops.len());
    for t in tops {
        let name = t["name"].as_str().expect("name");
        assert!(table.lines().any(|l| l.split_whitespace().next() == Some(name)), "{name} missing from the table");
        for c in [&t["a_cm"], &t["b_cm"], &t["c_cm"], &t["polarizability_a3"]["a"], &t["polarizability_a3"]["b"], &t["polarizability_a3"]["c"]] {
            assert!(c["value"].is_number() && c["source"].as_str().is_some_and(|s| !s.trim().is_empty()), "{name}: {c}");
        }
    }
}

/// Check one CSV trace: the header, finite numbers on every row, values within [0, 1].
fn check_trace(csv: &str, expected_rows: Option<usize>) {
    assert!(!csv.to_ascii_lowercase().contains("nan"), "NaN in trace.csv");
    assert!(!csv.to_ascii_lowercase().contains("inf"), "infinity in trace.csv");
    let mut lines = csv.lines();
    assert_eq!(lines.next(), Some("t_ps,cos2,cos2_2d"), "trace.csv header");
    let mut n = 0;
    for line in lines.filter(|l| !l.trim().is_empty()) {
        let cols: Vec<f64> = line.split(',').map(|c| c.trim().parse::<f64>().unwrap_or_else(|_| panic!("bad number in row {line:?}"))).collect();
        assert_eq!(cols.len(), 3, "row {line:?}");
        assert!(cols.iter().all(|x| x.is_finite()), "row {line:?}");
        for &c in &cols[1..] {
            assert!((-1e-9..=1.0 + 1e-9).contains(&c), "alignment value outside [0, 1] in row {line:?}");
        }
        n += 1;
    }
    if let Some(e) = expected_rows {
        assert_eq!(n, e, "rows in trace.csv");
    }
}

#[test]
fn simulate_writes_summary_trace_and_plot() {
    // Checks: a cheap scenario runs, exits 0, and --out writes summary.json (with the laser-safety
    // note), trace.csv (exact header, 0–2 ps at 50 fs inclusive = 41 rows, no NaN) and alignment.svg.
    let (r, sb) = simulate_value("sim-ok", &cheap_scenario());
    assert_eq!(r.code, Some(0), "stdout:\n{}\nstderr:\n{}", r.stdout, r.stderr);
    assert!(!r.stderr.contains("panicked"));
    let out = sb.out();
    let summary_text = std::fs::read_to_string(out.join("summary.json")).expect("summary.json written");
    assert!(summary_text.contains("laser_safety"), "summary.json lacks laser_safety");
    let summary: Value = serde_json::from_str(&summary_text).expect("summary.json is JSON");
    assert!(summary["laser_safety"].as_str().is_some_and(|t| !t.is_empty()));
    assert!(!summary_text.contains("NaN"));
    let csv = std::fs::read_to_string(out.join("trace.csv")).expect("trace.csv written");
    check_trace(&csv, Some(41));
    let svg = std::fs::read_to_string(out.join("alignment.svg")).expect("alignment.svg written");
    assert!(svg.contains("<svg"), "alignment.svg is not SVG");
    assert!(!svg.contains("NaN"), "NaN in alignment.svg");
    assert!(!r.stdout.contains("NaN"), "NaN in the printed summary:\n{}", r.stdout);
}

#[test]
fn simulate_json_prints_parseable_json() {
    // Checks: `simulate --json` prints only JSON on stdout (parseable as a whole), with and without --out.
    let sb = Sandbox::new("sim-json");
    let input = sb.write("scenario.json", &cheap_scenario().to_string());
    let r = run(&["simulate", s(&input), "--json"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).expect("simulate --json prints JSON");
    assert!(v.get("laser_safety").is_some(), "{v}");
    assert!(!sb.out().exists(), "nothing is written without --out");

    let out = sb.out();
    let r = run(&["simulate", s(&input), "--json", "--out", s(&out)]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let w: Value = serde_json::from_str(&r.stdout).expect("simulate --json --out prints only JSON");
    let file: Value = serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(w["molecule"], file["molecule"], "printed and written summaries agree");
}

#[test]
fn design_tiny_search_writes_a_replayable_design() {
    // Checks: a tiny design run succeeds, writes its documented files, and design.json replays
    // through `simulate` (the design file is a valid scenario).
    let (r, sb) = design_value("design-ok", &good_objective(), Duration::from_secs(120));
    assert_eq!(r.code, Some(0), "stdout:\n{}\nstderr:\n{}", r.stdout, r.stderr);
    let out = sb.out();
    for f in ["design.json", "summary.json", "trace.csv", "design.svg", "history.csv", "convergence.svg"] {
        assert!(out.join(f).is_file(), "{f} not written");
    }
    let summary = std::fs::read_to_string(out.join("summary.json")).unwrap();
    assert!(summary.contains("laser_safety"));
    serde_json::from_str::<Value>(&summary).expect("summary.json is JSON");
    let design: Value = serde_json::from_str(&std::fs::read_to_string(out.join("design.json")).unwrap()).unwrap();
    assert!(design["laser_safety"].as_str().is_some_and(|t| t.contains("class 4")), "design.json states intensities with the caution");
    let csv = std::fs::read_to_string(out.join("trace.csv")).unwrap();
    assert!(!csv.to_ascii_lowercase().contains("nan"), "NaN in the design trace");
    let replay_out = sb.dir.join("replay");
    let r2 = run(&["simulate", s(&out.join("design.json")), "--out", s(&replay_out)]);
    assert_eq!(r2.code, Some(0), "replay failed: {}", r2.stderr);
    assert!(replay_out.join("trace.csv").is_file());
}

#[test]
fn help_of_every_subcommand_has_an_example() {
    // Checks (common practice): `--help` of the program and of each subcommand exits 0 and shows an example.
    for args in [vec!["--help"], vec!["molecules", "--help"], vec!["simulate", "--help"], vec!["design", "--help"], vec!["limits", "--help"]] {
        let r = run(&args);
        assert_eq!(r.code, Some(0), "{args:?}: {}", r.stderr);
        assert!(r.stdout.contains("Example"), "{args:?} help lacks an example:\n{}", r.stdout);
    }
}

#[test]
fn version_flag_works() {
    // Checks (common practice): `--version` exits 0 and prints the program name.
    let r = run(&["--version"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    assert!(r.stdout.contains("kicktrain"), "{}", r.stdout);
}

#[test]
fn usage_errors_exit_2_without_panicking() {
    // Checks (common practice): a missing argument or an unknown subcommand is a usage error, exit 2.
    for args in [vec!["simulate"], vec!["frobnicate"], vec!["simulate", "x.json", "--no-such-flag"]] {
        let r = run(&args);
        assert_eq!(r.code, Some(2), "{args:?}: {}", r.stderr);
        assert!(!r.stderr.contains("panicked"), "{args:?}: {}", r.stderr);
    }
}

#[test]
fn out_path_that_is_a_file_fails_cleanly() {
    // Checks: when --out names an existing file, the run fails with one "error: " line naming the path
    // (an I/O failure, so any non-zero code other than a panic's 101 is accepted) and the file is untouched.
    let sb = Sandbox::new("out-is-file");
    let input = sb.write("scenario.json", &cheap_scenario().to_string());
    let blocker = sb.write("blocker", "keep me");
    let r = run(&["simulate", s(&input), "--out", s(&blocker)]);
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
    assert!(matches!(r.code, Some(c) if c != 0 && c != 101), "exit {:?}: {}", r.code, r.stderr);
    assert_eq!(r.stderr.lines().count(), 1, "{}", r.stderr);
    assert!(r.stderr.starts_with("error: ") && r.stderr.contains(s(&blocker)), "{}", r.stderr);
    assert_eq!(std::fs::read_to_string(&blocker).unwrap(), "keep me");
}

#[test]
fn scenario_path_that_is_a_directory() {
    // Checks: giving a folder instead of a scenario file is a clean input error naming the path.
    let sb = Sandbox::new("dir-as-file");
    let out = sb.out();
    let r = run(&["simulate", s(&sb.dir), "--out", s(&out)]);
    assert_clean_input_error(&r, &out, s(&sb.dir));
}

// ---------------------------------------------------------------------------------------------------
// Inputs that once hung or blamed the wrong field: each must now fail fast with the right field, or finish.
// ---------------------------------------------------------------------------------------------------

#[test]
fn rejects_or_finishes_inline_molecule_absurd_polarizability_is_rejected() {
    // Checks: an absurd polarizability volume is refused while reading the scenario, not after minutes
    // of basis growth.
    let mut v = cheap_scenario();
    v["molecule"] = json!({"b_cm": 2.0, "alpha_parallel_a3": 1e300, "alpha_perpendicular_a3": 1.5});
    let sb = Sandbox::new("bug-alpha");
    let input = sb.write("scenario.json", &v.to_string());
    let out = sb.out();
    let r = run_with_limit(&["simulate", s(&input), "--out", s(&out)], Duration::from_secs(30));
    assert_field_error(&r, &out, "molecule.alpha_parallel_a3");
}

#[test]
fn rejects_or_finishes_solver_step_too_small_is_rejected() {
    // Checks: a solver step that would need an astronomical number of steps is refused up front.
    let mut v = cheap_scenario();
    v["solver"] = json!({"method": "finite", "step_fs": 1e-9});
    let sb = Sandbox::new("bug-step");
    let input = sb.write("scenario.json", &v.to_string());
    let out = sb.out();
    let r = run_with_limit(&["simulate", s(&input), "--out", s(&out)], Duration::from_secs(30));
    assert_field_error(&r, &out, "solver.step_fs");
}

#[test]
fn rejects_or_finishes_huge_spin_weights_are_not_blamed_on_temperature() {
    // Checks: relative spin weights of large magnitude either work or are reported against spin_weights.
    let mut v = cheap_scenario();
    v["molecule"] = json!({"b_cm": 2.0, "alpha_parallel_a3": 2.4, "alpha_perpendicular_a3": 1.5, "spin_weights": [1e308, 1e308]});
    let (r, sb) = simulate_value("bug-spin", &v);
    if r.code == Some(0) {
        check_trace(&std::fs::read_to_string(sb.out().join("trace.csv")).unwrap(), Some(41));
    } else {
        assert_field_error(&r, &sb.out(), "molecule.spin_weights[0]");
    }
}

#[test]
fn rejects_or_finishes_objective_absurd_ceiling_is_rejected() {
    // Checks: the objective's intensity ceiling gets the same sanity bound as a scenario pulse.
    let mut v = good_objective();
    v["max_peak_intensity_wcm2"] = json!(1e300);
    v["pulses"].as_object_mut().unwrap().remove("peak_intensity_wcm2");
    design_fails_on("bug-ceiling", &v, "max_peak_intensity_wcm2");
}

#[test]
fn too_strong_ceiling_is_refused_before_the_search_with_one_prefix() {
    // Checks: an objective whose strongest train no basis could hold (N2 under a 1e17 W/cm² ceiling
    // needs J > 290, beyond its valid range) is refused while reading, naming the ceiling, with a
    // single "error:" prefix, exit 2, nothing written.
    let mut v = good_objective();
    v["max_peak_intensity_wcm2"] = json!(1e17);
    v["pulses"]["peak_intensity_wcm2"] = json!({"min": 0, "max": 1e17});
    let (r, sb) = design_value("bug-prefix", &v, Duration::from_secs(60));
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
    assert_field_error(&r, &sb.out(), "max_peak_intensity_wcm2");
    assert_eq!(r.stderr.matches("error:").count(), 1, "prefix repeated: {}", r.stderr);
}

/// An objective whose search is large enough that "before any search" is measurable.
fn with_bigger_search(mut v: Value) -> Value {
    v["search"] = json!({"seed": 1, "swarm_size": 200, "iterations": 2000, "starts": 20, "refine_candidates": 20, "refine_iterations": 2000});
    v
}

#[test]
fn rejects_or_finishes_objective_goal_window_too_long_for_the_replay() {
    // Checks: an objective whose replay window would be too long is rejected while reading, naming a goal field.
    let mut v = with_bigger_search(good_objective());
    v["goal"]["window_ps"] = json!([0.0, 100000.0]);
    v["goal"]["step_fs"] = json!(1000);
    let (r, sb) = design_value("bug-goal-window", &v, Duration::from_secs(30));
    assert_clean_input_error(&r, &sb.out(), "error: goal.");
    assert!(r.elapsed < Duration::from_secs(20), "should be rejected before the search (a search of this size takes minutes), took {:?}", r.elapsed);
}

#[test]
fn rejects_or_finishes_objective_absurd_value_at_time() {
    // Checks: an absurd goal time is rejected while reading the objective, naming goal.at_ps.
    let mut v = with_bigger_search(good_objective());
    v["goal"] = json!({"kind": "value_at", "observable": "cos2", "at_ps": 1e300});
    let (r, sb) = design_value("bug-at-ps", &v, Duration::from_secs(30));
    assert_field_error(&r, &sb.out(), "goal.at_ps");
    assert!(r.elapsed < Duration::from_secs(20), "should be rejected before the search (a search of this size takes minutes), took {:?}", r.elapsed);
}

#[test]
fn rejects_or_finishes_objective_absurd_delay_bound() {
    // Checks: an absurd delay bound is rejected while reading the objective, naming the delay field.
    let mut v = with_bigger_search(good_objective());
    v["pulses"]["delay_ps"] = json!({"min": 0.2, "max": 1e300});
    let (r, sb) = design_value("bug-delay", &v, Duration::from_secs(30));
    assert_clean_input_error(&r, &sb.out(), "pulses.");
    assert!(r.stderr.contains("delay_ps"), "{}", r.stderr);
    assert!(r.elapsed < Duration::from_secs(20), "should be rejected before the search (a search of this size takes minutes), took {:?}", r.elapsed);
}

#[test]
fn rejects_or_finishes_inline_molecule_strong_pulse_finishes_in_reasonable_time() {
    // Checks: an accepted scenario either completes or fails cleanly in bounded time (the basis growth
    // loop retries with ever larger bases up to J = 10000 when D = 0; the basis is now capped at J = 600).
    let mut v = cheap_scenario();
    v["molecule"] = json!({"b_cm": 2.0, "alpha_parallel_a3": 2.4, "alpha_perpendicular_a3": 1.5});
    v["pulses"][0]["peak_intensity_wcm2"] = json!(1e16);
    let (r, _sb) = {
        let sb = Sandbox::new("bug-slow");
        let input = sb.write("scenario.json", &v.to_string());
        let out = sb.out();
        (run_with_limit(&["simulate", s(&input), "--out", s(&out)], Duration::from_secs(60)), sb)
    };
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
    assert!(r.stderr.lines().count() <= 1, "{}", r.stderr);
    assert!(matches!(r.code, Some(0) | Some(1) | Some(2)), "exit {:?}: {}", r.code, r.stderr);
}

#[test]
fn scenario_bad_polarization_and_three_axis_goal_on_a_linear_molecule() {
    // Checks: ellipticity outside [0, 1], a three-axis goal for a linear molecule and a three-axis
    // orientation goal without fields off the Z axis fail with exit code 2 and a one-line error naming the
    // field; nothing is written.
    let mut v = good_scenario();
    v["pulses"][0]["polarization"] = json!({"angle_deg": 30, "ellipticity": 1.2});
    simulate_fails_on("bad-ellipticity", &v, "pulses[0].polarization.ellipticity");
    let mut v = good_scenario();
    v["pulses"][0]["polarization"] = json!({"angle_deg": "thirty"});
    simulate_fails_on("bad-angle", &v, "pulses[0].polarization.angle_deg");
    let mut v = good_scenario();
    v["goal"] = json!({"kind": "peak", "observable": "three_axis", "window_ps": [0.1, 5.0], "step_fs": 50});
    simulate_fails_on("three-axis-linear", &v, "goal.observable");
    // Three-axis orientation: a linear molecule, and a top whose fields all lie along Z, are refused.
    let mut v = good_scenario();
    v["goal"] = json!({"kind": "peak", "observable": "three_axis_oriented", "window_ps": [0.1, 5.0], "step_fs": 50});
    simulate_fails_on("three-axis-oriented-linear", &v, "goal.observable");
    v["molecule"] = json!("SO2");
    v["temperature_k"] = json!(0.3);
    v["static_field"] = json!({"strength_kv_cm": 20});
    simulate_fails_on("three-axis-oriented-along-z", &v, "goal.observable");
}

#[test]
fn a_three_axis_orientation_goal_reads_the_dipole_along_z_and_the_partner_axis_along_x() {
    // Checks the plumbing of the `three_axis_oriented` goal (each series it reads is checked against
    // independent references in tests/tilted_tops.rs): SO2 (dipole b; a is the most polarizable other axis)
    // in 30 kV/cm along Z with a pulse polarized along X; the column is min(cos_Zb, cos2_Xa) at every
    // sample and the goal's peak is its largest value in the window.
    let v = json!({
        "molecule": "SO2", "temperature_k": 0.3,
        "static_field": {"strength_kv_cm": 30},
        "pulses": [{"center_ps": 0.0, "fwhm_fs": 500, "peak_intensity_wcm2": 1e12, "polarization": {"angle_deg": 90}}],
        "window": {"start_ps": 0.0, "stop_ps": 3.0, "step_fs": 100},
        "goal": {"kind": "peak", "observable": "three_axis_oriented", "window_ps": [0.0, 3.0], "step_fs": 100}
    });
    let (r, sb) = simulate_value("three-axis-oriented", &v);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let trace = std::fs::read_to_string(sb.out().join("trace.csv")).unwrap();
    let header: Vec<&str> = trace.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap_or_else(|| panic!("no {name} in {header:?}"));
    let (g, z, x) = (col("three_axis_oriented"), col("cos_Zb"), col("cos2_Xa"));
    let mut best: f64 = f64::NEG_INFINITY;
    for line in trace.lines().skip(1) {
        let row: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        assert!((row[g] - row[z].min(row[x])).abs() < 1e-9, "{line}");
        best = best.max(row[g]);
    }
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(sb.out().join("summary.json")).unwrap()).unwrap();
    let value = summary["goal"]["value"].as_f64().unwrap();
    assert!((value - best).abs() < 1e-6 && value > 0.1, "goal {value} against the column's largest {best}");
}

#[test]
fn a_tilted_static_field_writes_the_orientation_with_every_lab_axis() {
    // Checks: with the static field at 45° the trace carries cos_X, cos_Y, cos_Z (and cos2_X, cos2_Y), the
    // summary the strongest orientation with each axis, and the screen names the angle. Exact facts: ⟨cosθ_Y⟩
    // = 0 (reflection through XZ) and, before the pulse, ⟨cosθ_X⟩ = ⟨cosθ_Z⟩ (the dressed ensemble points
    // along the field at 45°) — common practice, symmetry.
    let v = json!({
        "molecule": "OCS", "temperature_k": 0.5,
        "static_field": {"strength_kv_cm": 20, "angle_deg": 45},
        "pulses": [{"center_ps": 0.0, "fwhm_fs": 500, "peak_intensity_wcm2": 1e12}],
        "window": {"start_ps": -3.0, "stop_ps": 10.0, "step_fs": 500}
    });
    let (r, sb) = simulate_value("tilted", &v);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    assert!(r.stdout.contains("at 45.0° from Z towards X") && r.stdout.contains("strongest ⟨cosθ⟩ X"), "{}", r.stdout);
    let trace = std::fs::read_to_string(sb.out().join("trace.csv")).unwrap();
    let header: Vec<&str> = trace.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap_or_else(|| panic!("no {name} in {header:?}"));
    let first: Vec<f64> = trace.lines().nth(1).unwrap().split(',').map(|x| x.parse().unwrap()).collect();
    assert!((first[col("cos_X")] - first[col("cos_Z")]).abs() < 1e-9 && first[col("cos_Z")] > 0.05, "{first:?}");
    for line in trace.lines().skip(1) {
        let row: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        assert_eq!(row[col("cos_Y")], 0.0);
        assert!(row[col("cos2_X")] > 0.0 && row[col("cos2_Y")] > 0.0, "{row:?}");
    }
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(sb.out().join("summary.json")).unwrap()).unwrap();
    assert!(summary["lab_orientation"]["strongest_cos_X"]["value"].is_number(), "{}", summary["lab_orientation"]);
}

#[test]
fn scenario_bad_static_field_angle() {
    // Checks: an angle that is not a number or lies outside ±360°, and a top in a tilted static field with
    // a terahertz pulse (not modelled yet), fail with exit code 2 and a one-line error naming
    // static_field.angle_deg; nothing is written.
    let mut v = good_scenario();
    v["molecule"] = json!("OCS");
    v["temperature_k"] = json!(1.0);
    v["static_field"] = json!({"strength_kv_cm": 10, "angle_deg": "tilted"});
    simulate_fails_on("angle-text", &v, "static_field.angle_deg");
    v["static_field"] = json!({"strength_kv_cm": 10, "angle_deg": 1000});
    simulate_fails_on("angle-range", &v, "static_field.angle_deg");
    v["molecule"] = json!("SO2");
    v["static_field"] = json!({"strength_kv_cm": 10, "angle_deg": 30});
    let mut thz = v.clone();
    thz["terahertz"] = json!([{"center_ps": 0.0, "duration_fs": 500, "peak_field_kv_cm": 100}]);
    simulate_fails_on("angle-top-terahertz", &thz, "static_field.angle_deg");
    // Steps in the instantaneous frame exist for tops in a tilted static field only: asked for elsewhere
    // (here a linear molecule) they are refused by name, not ignored; a value that is not a boolean too.
    let mut framed = good_scenario();
    framed["solver"] = json!({"frame_steps": true});
    simulate_fails_on("frame-steps-linear", &framed, "solver.frame_steps");
    framed["solver"] = json!({"frame_steps": "yes"});
    simulate_fails_on("frame-steps-text", &framed, "solver.frame_steps");
    // ⟨cos²θ_2D⟩ is not computed on this path: a goal on it is refused rather than scored as zero.
    v["molecule"] = json!("OCS");
    // A pulse too strong for the largest basis of this path (P ≈ 78 at J ≤ 80) is refused before any work.
    let mut strong = v.clone();
    strong["pulses"] = json!([{"center_ps": 0.0, "fwhm_fs": 100, "peak_intensity_wcm2": 9e13}]);
    simulate_fails_on("angle-strong-pulse", &strong, "pulses");
    v["goal"] = json!({"kind": "peak", "observable": "cos2_2d", "window_ps": [0.1, 5.0], "step_fs": 50});
    simulate_fails_on("angle-2d-goal", &v, "goal.observable");
    // ⟨cosθ_X⟩ is zero without a tilted field, for tops as for linear molecules: refused, not scored as zero.
    v["goal"] = json!({"kind": "peak", "observable": "cos_x", "window_ps": [0.1, 5.0], "step_fs": 50});
    v["static_field"] = json!({"strength_kv_cm": 10, "angle_deg": 180});
    simulate_fails_on("cos-x-along-z", &v, "goal.observable");
    v["molecule"] = json!("SO2");
    v["static_field"] = json!({"strength_kv_cm": 10});
    simulate_fails_on("cos-x-top", &v, "goal.observable");
}

#[test]
fn a_cos_x_goal_scores_the_orientation_along_x() {
    // Check: the goal's value is the largest ⟨cosθ_X⟩ of the trace in the goal window (read back from
    // trace.csv, direct arithmetic on the written samples), and a field tilted away from X (−45°) orients
    // towards −X, so its peak is the reversed field's minimum (symmetry: reflection X → −X).
    let goal_value = |angle: f64| {
        let v = json!({
            "molecule": "OCS", "temperature_k": 0.5,
            "static_field": {"strength_kv_cm": 20, "angle_deg": angle},
            "pulses": [{"center_ps": 0.0, "fwhm_fs": 500, "peak_intensity_wcm2": 1e12}],
            "window": {"start_ps": -1.0, "stop_ps": 6.0, "step_fs": 100},
            "goal": {"kind": "peak", "observable": "cos_x", "window_ps": [0.5, 5.0], "step_fs": 100}
        });
        let (r, sb) = simulate_value(&format!("cos-x-{angle}"), &v);
        assert_eq!(r.code, Some(0), "{}", r.stderr);
        let summary: Value = serde_json::from_str(&std::fs::read_to_string(sb.out().join("summary.json")).unwrap()).unwrap();
        let trace = std::fs::read_to_string(sb.out().join("trace.csv")).unwrap();
        let header: Vec<&str> = trace.lines().next().unwrap().split(',').collect();
        let (ct, cx) = (header.iter().position(|h| *h == "t_ps").unwrap(), header.iter().position(|h| *h == "cos_X").unwrap());
        let in_window: Vec<f64> = trace
            .lines()
            .skip(1)
            .map(|l| l.split(',').map(|x| x.parse::<f64>().unwrap()).collect::<Vec<f64>>())
            .filter(|row| row[ct] >= 0.5 - 1e-9 && row[ct] <= 5.0 + 1e-9)
            .map(|row| row[cx])
            .collect();
        (summary["goal"]["value"].as_f64().unwrap_or_else(|| panic!("{}", summary["goal"])), in_window)
    };
    let (up, samples) = goal_value(45.0);
    let top = samples.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    assert!((up - top).abs() < 1e-6 && up > 0.02, "goal {up} vs largest sample {top}");
    let (down, mirrored) = goal_value(-45.0);
    assert!(samples.iter().zip(&mirrored).all(|(a, b)| (a + b).abs() < 1e-9), "reflection X → −X");
    let least = samples.iter().cloned().fold(f64::INFINITY, f64::min);
    assert!((down + least).abs() < 1e-6, "goal at −45° {down} vs −(least at 45°) {}", -least);
}

#[test]
fn a_top_in_a_tilted_static_field_is_designed_for_its_dipole_orientation_along_x() {
    // Check: a design for a symmetric top (CH3F, dipole along a) with the static-field angle searched runs,
    // keeps the angle inside its bounds, and its goal value is the largest ⟨cosθ_X⟩ of the dipole axis in
    // the goal window of the written trace (direct arithmetic on the samples).
    let v = json!({
        "molecule": "CH3F", "temperature_k": 0.3,
        "static_field_kv_cm": 20, "static_field_angle_deg": {"min": 10, "max": 80},
        "pulses": {"count": 1, "fwhm_fs": 300, "peak_intensity_wcm2": {"min": 0, "max": 5e12}},
        "max_peak_intensity_wcm2": 5e12,
        "goal": {"kind": "peak", "observable": "cos_x", "window_ps": [0.3, 1.5], "step_fs": 100},
        "search": {"seed": 2, "swarm_size": 2, "iterations": 1, "starts": 1, "refine_candidates": 1, "refine_iterations": 0}
    });
    let (r, sb) = design_value("tilted-top-design", &v, Duration::from_secs(600));
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let design: Value = serde_json::from_str(&std::fs::read_to_string(sb.out().join("design.json")).unwrap()).unwrap();
    let angle = design["static_field"]["angle_deg"].as_f64().unwrap_or_else(|| panic!("{design}"));
    assert!((10.0..=80.0).contains(&angle), "{angle}");
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(sb.out().join("summary.json")).unwrap()).unwrap();
    let trace = std::fs::read_to_string(sb.out().join("trace.csv")).unwrap();
    let header: Vec<&str> = trace.lines().next().unwrap().split(',').collect();
    let (ct, cx) = (header.iter().position(|h| *h == "t_ps").unwrap(), header.iter().position(|h| *h == "cos_Xa").unwrap());
    let centre = design["pulses"][0]["center_ps"].as_f64().unwrap();
    let best = trace
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(|x| x.parse::<f64>().unwrap()).collect::<Vec<f64>>())
        .filter(|row| row[ct] >= centre + 0.3 - 1e-9 && row[ct] <= centre + 1.5 + 1e-9)
        .map(|row| row[cx])
        .fold(f64::NEG_INFINITY, f64::max);
    let value = summary["score"].as_f64().unwrap_or_else(|| panic!("{summary}"));
    assert!((value - best).abs() < 1e-6 && value > 0.01, "score {value} vs largest sample {best}");
}

#[cfg(unix)]
#[test]
fn a_reader_that_stops_early_ends_the_program_quietly() {
    // Common practice for Unix command-line tools: when the reader of stdout closes the pipe (`| head`),
    // the program ends on SIGPIPE instead of panicking. The JSON listing (~170 kB) overfills the pipe
    // buffer, so the write after the close cannot succeed.
    use std::io::{BufRead, BufReader};
    use std::os::unix::process::ExitStatusExt;
    let mut child = Command::new(BIN)
        .args(["pendular", "N2", "--intensity-wcm2", "1e13", "--j-max", "40", "--json"])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let mut first = String::new();
    BufReader::new(child.stdout.take().unwrap()).read_line(&mut first).unwrap();
    let out = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(out.status.signal(), Some(13), "ends on SIGPIPE: {:?}", out.status);
}

#[test]
fn pendular_prints_no_negative_zero() {
    // Checks (common practice for printed tables): a weak field pointing down gives values that round to
    // zero from below (⟨cosθ⟩ ≈ −2e-5, μE/B ≈ −1e-4, ground energy ≈ −1e-7 cm⁻¹); none prints as "-0.000…".
    let r = run(&["pendular", "OCS", "--static-kv-cm", "-0.001"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    for token in r.stdout.split(|c: char| c.is_whitespace() || c == ',') {
        let zero = token.parse::<f64>().is_ok_and(|x| x == 0.0);
        assert!(!(zero && token.starts_with('-')), "negative zero {token:?} printed:\n{}", r.stdout);
    }
    assert!(r.stdout.contains("-0.00002"), "a value that does not round to zero keeps its sign:\n{}", r.stdout);
}

#[test]
fn pendular_with_the_static_field_at_an_angle() {
    // The table and the JSON carry ⟨cosθ_X⟩ and name the angle, for a linear molecule and a top; a bad angle
    // is one line naming `static_angle_deg`, a top whose classes would be too large one naming
    // `temperature_k`, exit 2 (the values themselves are checked in tests/tilted_pendular.rs and
    // tests/tilted_pendular.rs).
    let r = run(&["pendular", "OCS", "--intensity-wcm2", "1e11", "--static-kv-cm", "20", "--static-angle-deg", "45"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    assert!(r.stdout.contains("at 45.0° from Z towards X") && r.stdout.contains("⟨cosθ_X⟩") && r.stdout.contains("|M_f|"), "{}", r.stdout);
    assert!(r.stdout.contains("Laser safety"), "{}", r.stdout);
    let r = run(&["pendular", "OCS", "--intensity-wcm2", "1e11", "--static-kv-cm", "20", "--static-angle-deg", "45", "--json"]);
    let v: Value = serde_json::from_str(&r.stdout).expect("JSON");
    let x = v["result"]["thermal_cos_x"].as_f64().expect("thermal_cos_x");
    assert!(x > 0.0 && x < 1.0 && v["result"]["static_angle_deg"].as_f64() == Some(45.0), "{}", r.stdout);
    let r = run(&["pendular", "SO2", "--intensity-wcm2", "1e11", "--static-kv-cm", "20", "--static-angle-deg", "45", "--temperature-k", "0.3", "--json"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).expect("JSON");
    let first = &v["result"]["states"][0];
    assert!(first["level"].as_str() == Some("0 0 0") && first["reflection"].as_i64() == Some(1) && first["cos_x"].as_f64().unwrap() > 0.05, "{}", r.stdout);
    let nowhere = std::env::temp_dir().join("kicktrain-pendular-angle-never-written");
    for args in [
        vec!["pendular", "OCS", "--static-kv-cm", "20", "--static-angle-deg", "400"],
        vec!["pendular", "OCS", "--static-kv-cm", "20", "--static-angle-deg", "nan"],
    ] {
        assert_field_error(&run(&args), &nowhere, "static_angle_deg");
    }
    let heavy = ["pendular", "C6H5CN", "--intensity-wcm2", "1e11", "--static-kv-cm", "5", "--static-angle-deg", "30", "--temperature-k", "1"];
    assert_field_error(&run(&heavy), &nowhere, "temperature_k");
}

#[test]
fn focus_json_and_the_ionization_warning() {
    // Checks: `focus --json` prints JSON with unit-suffixed keys and the laser-safety caution; 2 mJ in 40 fs
    // focused to 5 µm (I0 = 2P/(πw0²) ≈ 1.2e17 W/cm², Siegman "Lasers" ch. 17) warns that every library
    // molecule ionizes, in text and JSON; 0.1 mJ in 100 fs on 100 µm (≈ 6e12 W/cm²) does not warn.
    let r = run(&["focus", "--energy-mj", "2", "--fwhm-fs", "40", "--waist-um", "5", "--json"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).expect("focus --json prints JSON");
    let i0 = v["peak_intensity_wcm2"].as_f64().unwrap();
    assert!((i0 / 1.196e17 - 1.0).abs() < 1e-3, "{i0}");
    for key in ["peak_power_w", "waist_um", "peak_field_v_per_m", "peak_fluence_j_per_cm2", "laser_safety"] {
        assert!(v.get(key).is_some(), "{key} missing: {v}");
    }
    assert!(v["warnings"][0].as_str().unwrap().contains("every library molecule"), "{v}");
    let text = run(&["focus", "--energy-mj", "2", "--fwhm-fs", "40", "--waist-um", "5"]);
    assert!(text.stdout.contains("warning:") && text.stdout.contains("Laser safety"), "{}", text.stdout);
    let low = run(&["focus", "--energy-mj", "0.1", "--fwhm-fs", "100", "--waist-um", "100", "--molecule", "N2"]);
    assert_eq!(low.code, Some(0), "{}", low.stderr);
    assert!(!low.stdout.contains("warning"), "{}", low.stdout);
    let bad = run(&["focus", "--energy-mj", "1", "--fwhm-fs", "40", "--waist-um", "30", "--molecule", "unobtainium"]);
    assert_eq!(bad.code, Some(2));
    assert!(bad.stderr.starts_with("error: molecule"), "{}", bad.stderr);
}

#[test]
fn terahertz_only_run_and_design_file_carry_the_laser_safety_caution() {
    // Checks (laser-safety practice, IEC 60825-1): a run with only a terahertz pulse prints the caution.
    let v = json!({
        "molecule": "OCS", "temperature_k": 1,
        "terahertz": [{"center_ps": 0.5, "duration_fs": 500, "peak_field_kv_cm": 200, "waveform": "single_cycle"}],
        "window": {"start_ps": 0.0, "stop_ps": 2.0, "step_fs": 50}
    });
    let sb = Sandbox::new("thz-safety");
    let input = sb.write("scenario.json", &v.to_string());
    let r = run(&["simulate", s(&input)]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    assert!(r.stdout.contains("Laser safety"), "{}", r.stdout);
}

#[test]
fn scan_plot_labels_axes_in_words_and_keeps_key_paths_in_the_csv() {
    // Checks: scan.svg reads "pulse 1 peak intensity (W/cm²)" with the caution (an intensity is scanned);
    // scan.csv keeps the key path in its header.
    let sb = Sandbox::new("scan-labels");
    let input = sb.write("scenario.json", &cheap_scenario().to_string());
    let out = sb.out();
    let r = run(&["scan", s(&input), "--x", "pulses[0].peak_intensity_wcm2", "--from", "1e12", "--to", "2e12", "--steps", "2", "--out", s(&out), "--quiet"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    let svg = std::fs::read_to_string(out.join("scan.svg")).unwrap();
    assert!(svg.contains("pulse 1 peak intensity (W/cm²)"), "axis label");
    assert!(svg.contains("Laser safety"), "caution on the plot");
    let csv = std::fs::read_to_string(out.join("scan.csv")).unwrap();
    assert!(csv.starts_with("pulses[0].peak_intensity_wcm2,value"), "{csv}");
}

// ---------------------------------------------------------------------------------------------------
// Outputs written whole or not at all; signals; exit codes
// ---------------------------------------------------------------------------------------------------

/// Start the binary with `args`, send `signals` (names for `kill -s`) after the given delays, and wait.
fn run_and_signal(args: &[&str], signals: &[(Duration, &str)]) -> Run {
    let scratch = Sandbox::new("sig");
    let (so, se) = (scratch.dir.join("stdout"), scratch.dir.join("stderr"));
    let start = Instant::now();
    let mut child = Command::new(BIN)
        .args(args)
        .stdin(Stdio::null())
        .stdout(std::fs::File::create(&so).unwrap())
        .stderr(std::fs::File::create(&se).unwrap())
        .spawn()
        .expect("spawn kicktrain");
    for (delay, sig) in signals {
        std::thread::sleep(*delay);
        let _ = Command::new("kill").args(["-s", sig, &child.id().to_string()]).status();
    }
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break s;
        }
        if start.elapsed() > Duration::from_secs(120) {
            let _ = child.kill();
            panic!("kicktrain {args:?} did not stop within 120 s of its signals");
        }
        std::thread::sleep(Duration::from_millis(10));
    };
    Run {
        code: status.code(),
        stdout: std::fs::read_to_string(&so).unwrap_or_default(),
        stderr: std::fs::read_to_string(&se).unwrap_or_default(),
        elapsed: start.elapsed(),
    }
}

/// Entries of `dir` other than its hidden marker, sorted.
fn listing(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> =
        std::fs::read_dir(dir).map(|d| d.filter_map(|e| e.ok()).map(|e| e.file_name().to_string_lossy().into_owned()).collect()).unwrap_or_default();
    v.sort();
    v
}

const THREE_PULSES: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/objectives/three-pulse-room-temperature.json");

#[test]
fn sigterm_during_a_design_writes_the_best_design_so_far_and_exits_4() {
    // Checks: SIGTERM (a batch scheduler's time limit) stops the search cleanly; the folder holds every
    // file, summary.json says interrupted, and the exit code tells a partial result from a finished one.
    let sb = Sandbox::new("sigterm-design");
    let out = sb.out();
    let r = run_and_signal(&["design", THREE_PULSES, "--out", s(&out), "--quiet"], &[(Duration::from_millis(2500), "TERM")]);
    assert_eq!(r.code, Some(4), "stdout:\n{}\nstderr:\n{}", r.stdout, r.stderr);
    assert_eq!(listing(&out), [".kicktrain-output", "convergence.svg", "design.json", "design.svg", "history.csv", "summary.json", "trace.csv"]);
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["interrupted"], json!(true));
    assert!(r.stdout.contains("interrupted"), "{}", r.stdout);
    assert_eq!(listing(&sb.dir), ["out"], "no staging folder left");
}

#[test]
fn a_second_signal_quits_at_once_and_leaves_no_folder() {
    // Checks: Ctrl-C twice: exit 130, no output folder and no staging folder left behind.
    let sb = Sandbox::new("sigint-twice");
    let out = sb.out();
    let r = run_and_signal(&["design", THREE_PULSES, "--out", s(&out), "--quiet"], &[(Duration::from_millis(2000), "INT"), (Duration::from_millis(30), "INT")]);
    assert_eq!(r.code, Some(130), "stdout:\n{}\nstderr:\n{}", r.stdout, r.stderr);
    assert!(!out.exists());
    assert!(listing(&sb.dir).is_empty(), "left behind: {:?}", listing(&sb.dir));
}

#[test]
fn a_scan_stopped_by_sigterm_keeps_the_finished_points_marked_partial() {
    // Checks: scan on SIGTERM writes the rows it finished (fewer than asked), PARTIAL.txt, exit 4.
    let sb = Sandbox::new("sigterm-scan");
    let mut v = cheap_scenario();
    v["temperature_k"] = json!(300);
    v["window"] = json!({"start_ps": 0.0, "stop_ps": 12.0, "step_fs": 20});
    let input = sb.write("scenario.json", &v.to_string());
    let out = sb.out();
    let args = [
        "scan",
        s(&input),
        "--x",
        "pulses[0].center_ps",
        "--from",
        "0",
        "--to",
        "1",
        "--steps",
        "40",
        "--y",
        "pulses[0].peak_intensity_wcm2",
        "--y-from",
        "1e13",
        "--y-to",
        "5e13",
        "--y-steps",
        "40",
        "--out",
        s(&out),
        "--quiet",
    ];
    let r = run_and_signal(&args, &[(Duration::from_millis(1500), "TERM")]);
    assert_eq!(r.code, Some(4), "stdout:\n{}\nstderr:\n{}", r.stdout, r.stderr);
    let rows = std::fs::read_to_string(out.join("scan.csv")).unwrap().lines().count() - 1;
    assert!(rows > 0 && rows < 1600, "{rows} rows");
    assert!(std::fs::read_to_string(out.join("PARTIAL.txt")).unwrap().contains(&format!("after {rows} of 1600 points")));
}

#[test]
fn a_run_killed_at_any_moment_leaves_the_last_complete_folder() {
    // Checks: SIGKILL (no handler can run) at many moments of a second run into the same folder: the
    // folder always holds one complete set (the first run's or the second's), never a mix or a fragment.
    let sb = Sandbox::new("kill-anytime");
    let input = sb.write("scenario.json", &cheap_scenario().to_string());
    let out = sb.out();
    let first = run(&["simulate", s(&input), "--out", s(&out)]);
    assert_eq!(first.code, Some(0), "{}", first.stderr);
    let complete = [".kicktrain-output", "alignment.svg", "summary.json", "trace.csv"];
    let reference = std::fs::read_to_string(out.join("trace.csv")).unwrap();
    let full = run(&["simulate", s(&input), "--out", s(&out)]).elapsed;
    for k in 0..12 {
        let delay = full.mul_f64(k as f64 / 10.0);
        let _ = run_and_signal(&["simulate", s(&input), "--out", s(&out)], &[(delay, "KILL")]);
        assert_eq!(listing(&out), complete, "after a kill at {delay:?}");
        assert_eq!(std::fs::read_to_string(out.join("trace.csv")).unwrap(), reference);
        serde_json::from_str::<Value>(&std::fs::read_to_string(out.join("summary.json")).unwrap()).expect("whole summary");
    }
}

#[test]
fn foreign_folders_unwritable_outputs_and_huge_inputs_are_refused_before_any_work() {
    // Checks: a folder holding a user's own files is refused (exit 2, file untouched); an output that
    // cannot be created fails at once with exit 3 (before a design search); a 17 MiB input is refused.
    let sb = Sandbox::new("refusals");
    let mine = sb.dir.join("mine");
    std::fs::create_dir_all(&mine).unwrap();
    std::fs::write(mine.join("notes.txt"), "keep").unwrap();
    let input = sb.write("scenario.json", &cheap_scenario().to_string());
    let r = run(&["simulate", s(&input), "--out", s(&mine)]);
    assert_eq!(r.code, Some(2), "{}", r.stderr);
    assert!(r.stderr.starts_with("error: --out:") && r.stderr.lines().count() == 1, "{}", r.stderr);
    assert_eq!(listing(&mine), ["notes.txt"]);
    let blocked = sb.dir.join("a-file");
    std::fs::write(&blocked, "x").unwrap();
    let r = run(&["design", "--out", s(&blocked.join("sub")), "--quiet"]);
    assert_eq!(r.code, Some(3), "{}", r.stderr);
    assert!(r.elapsed < Duration::from_secs(2), "failed only after {:?}", r.elapsed);
    let big = sb.write("big.json", &" ".repeat(17 << 20));
    let r = run(&["simulate", s(&big)]);
    assert_eq!(r.code, Some(2));
    assert!(r.stderr.contains("at most 16 MiB") && r.stderr.len() < 300, "{}", r.stderr);
}

#[test]
fn identical_designs_write_identical_history_and_plots() {
    // Checks: the same objective and seed give byte-identical history.csv and convergence.svg (the
    // history is recorded in a fixed order, not in the order parallel evaluations finish).
    let mut v = good_objective();
    v["search"] = json!({"seed": 3, "effort": "quick"});
    let (a, sa) = design_value("hist-a", &v, Duration::from_secs(120));
    let (b, sbx) = design_value("hist-b", &v, Duration::from_secs(120));
    assert_eq!((a.code, b.code), (Some(0), Some(0)), "{}{}", a.stderr, b.stderr);
    for f in ["history.csv", "convergence.svg", "design.json"] {
        assert_eq!(std::fs::read(sa.out().join(f)).unwrap(), std::fs::read(sbx.out().join(f)).unwrap(), "{f} differs");
    }
}

#[test]
fn runs_above_the_step_limit_are_refused_naming_the_cost_and_run_with_allow_long() {
    // Checks: the finite-pulse step estimate is compared with solver.max_steps before any work; the
    // one-line error names the input that drives the cost (the pulse, or solver.step_fs when set);
    // --allow-long goes on.
    let mut v = cheap_scenario();
    v["solver"] = json!({"method": "finite", "max_steps": 5});
    simulate_fails_on("steps-pulse", &v, "pulses[0].fwhm_fs");
    v["solver"] = json!({"method": "finite", "max_steps": 5, "step_fs": 1});
    simulate_fails_on("steps-step", &v, "solver.step_fs");
    let sb = Sandbox::new("allow-long");
    let input = sb.write("scenario.json", &v.to_string());
    let r = run(&["simulate", s(&input), "--allow-long"]);
    assert_eq!(r.code, Some(0), "{}", r.stderr);
    // A 5 ns pulse at the default limit: refused at once, not after hours.
    let mut long = cheap_scenario();
    long["pulses"][0]["fwhm_fs"] = json!(5e6);
    let (r, sb) = simulate_value("steps-long", &long);
    assert_field_error(&r, &sb.out(), "pulses[0].fwhm_fs");
    assert!(r.elapsed < Duration::from_secs(5) && r.stderr.contains("max_steps"), "{:?} {}", r.elapsed, r.stderr);
}

#[test]
fn times_and_strengths_are_checked_against_physics_not_only_finiteness() {
    // Checks: times beyond ±10 µs, an edge shorter than an optical cycle and an absurd β are refused
    // with the field named (they gave NaN traces or endless runs before).
    type Change = Box<dyn Fn(&mut Value)>;
    let cases: Vec<(&str, Change, &str)> = vec![
        ("t-centre", Box::new(|v: &mut Value| v["pulses"][0]["center_ps"] = json!(1e306)), "pulses[0].center_ps"),
        ("t-window", Box::new(|v: &mut Value| v["window"]["stop_ps"] = json!(1e300)), "window.stop_ps"),
        ("t-start", Box::new(|v: &mut Value| v["window"]["start_ps"] = json!(-2e7)), "window.start_ps"),
        (
            "rise",
            Box::new(|v: &mut Value| {
                v["pulses"][0]["shape"] = json!("flat_top");
                v["pulses"][0]["rise_fs"] = json!(0.01);
            }),
            "pulses[0].rise_fs",
        ),
        (
            "beta",
            Box::new(|v: &mut Value| {
                v["molecule"] = json!({"name": "x", "b_cm": 0.2, "alpha_parallel_a3": 5, "alpha_perpendicular_a3": 3, "dipole_debye": 1, "beta_parallel_au": 1e9, "beta_perpendicular_au": 1});
            }),
            "molecule.beta_parallel_au",
        ),
    ];
    for (tag, change, field) in cases {
        let mut v = cheap_scenario();
        change(&mut v);
        simulate_fails_on(tag, &v, field);
    }
}

#[test]
fn a_generated_corpus_of_hostile_values_never_panics_and_fails_cleanly() {
    // Checks (common practice for input validation): every leaf of a valid scenario replaced by each of
    // a set of hostile values (huge, tiny, negative, wrong type, a 1 MB string) either still runs (exit 0)
    // or fails cleanly: exit 2, one short line naming the key or its parent, nothing written, no panic.
    let base = cheap_scenario();
    let mut leaves: Vec<Vec<Value>> = vec![];
    fn walk(v: &Value, path: Vec<Value>, out: &mut Vec<Vec<Value>>) {
        match v {
            Value::Object(m) => m.iter().for_each(|(k, x)| walk(x, [path.clone(), vec![json!(k)]].concat(), out)),
            Value::Array(a) => a.iter().enumerate().for_each(|(i, x)| walk(x, [path.clone(), vec![json!(i)]].concat(), out)),
            _ => out.push(path),
        }
    }
    walk(&base, vec![], &mut leaves);
    let long = "x".repeat(1 << 20);
    let hostile = [json!(1e308), json!(-1e308), json!(5e-324), json!(-1), json!(0), json!("12"), json!(null), json!([]), json!({}), json!(long)];
    let sb = Sandbox::new("corpus");
    let (mut failures, mut runs) = (0, 0);
    for path in &leaves {
        let key = path.last().unwrap().as_str().map(str::to_string).unwrap_or_default();
        for h in &hostile {
            let mut v = base.clone();
            let mut cur = &mut v;
            for p in path {
                cur = match p {
                    Value::String(k) => &mut cur[k.as_str()],
                    Value::Number(i) => &mut cur[i.as_u64().unwrap() as usize],
                    _ => unreachable!(),
                };
            }
            *cur = h.clone();
            let input = sb.write("scenario.json", &v.to_string());
            let out = sb.dir.join("out");
            let _ = std::fs::remove_dir_all(&out);
            let r = run_with_limit(&["simulate", s(&input), "--out", s(&out)], Duration::from_secs(60));
            runs += 1;
            let ctx = format!(
                "{path:?} = {}: exit {:?}, stderr {:?}",
                h.to_string().chars().take(40).collect::<String>(),
                r.code,
                r.stderr.chars().take(300).collect::<String>()
            );
            assert!(!r.stderr.contains("panicked"), "{ctx}");
            match r.code {
                Some(0) => assert!(out.join("trace.csv").is_file(), "{ctx}"),
                Some(2) => {
                    failures += 1;
                    assert_eq!(r.stderr.lines().count(), 1, "{ctx}");
                    assert!(r.stderr.starts_with("error: ") && r.stderr.len() < 1000, "{ctx}");
                    let parent = path.iter().rev().find_map(|p| p.as_str().filter(|k| *k != key)).unwrap_or("");
                    assert!(r.stderr.contains(&key) || (!parent.is_empty() && r.stderr.contains(parent)), "error names neither {key} nor {parent}: {ctx}");
                    assert!(!out.exists(), "{ctx}");
                }
                _ => panic!("unexpected exit: {ctx}"),
            }
        }
    }
    assert!(failures > runs / 2, "{failures} of {runs} hostile inputs refused");
}

#[test]
fn an_all_m_basis_above_the_memory_cap_is_refused_before_any_work() {
    // Checks: the three-axis SO2 example builds all-M blocks up to J = 36 of about 8,400 states (about
    // 0.1 GB of operators a worker; estimate checked against the built operators in lab_frame's tests).
    // Capped at 0.02 GB it is refused at once naming the pulses; a malformed cap names the variable.
    let input = Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/examples/scenarios/sulfur-dioxide-three-axis.json"));
    for (cap, key) in [("0.02", "pulses"), ("-1", "KICKTRAIN_MAX_MEMORY_GB"), ("lots", "KICKTRAIN_MAX_MEMORY_GB")] {
        let sb = Sandbox::new("memcap");
        let out = sb.out();
        let r = run_with_env(&["simulate", s(input), "--out", s(&out)], &[("KICKTRAIN_MAX_MEMORY_GB", cap)], Duration::from_secs(60));
        assert_field_error(&r, &out, key);
        assert!(r.elapsed < Duration::from_secs(10), "{:?}", r.elapsed);
        if key == "pulses" {
            assert!(r.stderr.contains("all-M basis up to J = 36") && r.stderr.contains("GB"), "{}", r.stderr);
        }
    }
}

#[test]
fn a_thermal_ensemble_above_the_state_limit_is_refused_naming_the_temperature() {
    // Checks: SO2 at 50 K holds ~22,600 initial states (above the tops' default of 2e4; the run took
    // minutes before): refused at once naming temperature_k; a raised solver.max_states is accepted.
    let mut v = cheap_scenario();
    v["molecule"] = json!("SO2");
    v["temperature_k"] = json!(50);
    let (r, sb) = simulate_value("states", &v);
    assert_field_error(&r, &sb.out(), "temperature_k");
    assert!(r.stderr.contains("max_states") && r.elapsed < Duration::from_secs(10), "{:?} {}", r.elapsed, r.stderr);
    v["temperature_k"] = json!(2);
    v["solver"] = json!({"max_states": 10});
    simulate_fails_on("states-low", &v, "temperature_k");
}

// ---------------------------------------------------------------------------------------------------
// Limits maps (`kicktrain limits`)
// ---------------------------------------------------------------------------------------------------

const TWO_PULSES: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/objectives/two-pulse-room-temperature.json");

#[test]
fn limits_writes_its_table_csv_and_plot_with_energies_and_the_caution() {
    // Checks: a small map finishes, prints the table with the bound and the laser-safety caution, and
    // writes limits.csv (one row per combination, no NaN, energies at the focus) and limits.svg.
    let sb = Sandbox::new("limits-ok");
    let out = sb.out();
    let r = run(&["limits", TWO_PULSES, "--max-count", "2", "--ceilings", "3e13", "--effort", "quick", "--waist-um", "40", "--out", s(&out), "--quiet"]);
    assert_eq!(r.code, Some(0), "stdout:\n{}\nstderr:\n{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("bound") && r.stdout.contains("class 4"), "{}", r.stdout);
    assert!(r.stdout.contains("mJ"), "energies at the focus: {}", r.stdout);
    let csv = std::fs::read_to_string(out.join("limits.csv")).unwrap();
    assert!(!csv.to_ascii_lowercase().contains("nan"));
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(lines.len(), 3, "{csv}");
    assert!(lines[0].starts_with("temperature_k,fwhm_fs,ceiling_wcm2,pulse_energy_mj,count,score_peak_cos2"), "{}", lines[0]);
    // 3e13 W/cm² at a 40 µm waist for a 50 fs Gaussian: E = I π w²/2 · τ sqrt(π/(4 ln 2)) = 0.0402 mJ
    // (peak intensity of a Gaussian beam and area of a Gaussian pulse: common practice).
    let e: f64 = lines[1].split(',').nth(3).unwrap().parse().unwrap();
    let expect = 3e13 * 1e4 * std::f64::consts::PI * (40e-6f64).powi(2) / 2.0 * 50e-15 * (std::f64::consts::PI / (4.0 * 2f64.ln())).sqrt() * 1e3;
    assert!((e - expect).abs() < 1e-4, "{e} vs {expect}");
    assert!(std::fs::read_to_string(out.join("limits.svg")).unwrap().contains("<svg"));
}

#[test]
fn limits_bad_inputs_name_the_option_and_write_nothing() {
    // Checks: each bad option value gives one line naming the option, exit 2, no folder.
    let sb = Sandbox::new("limits-bad");
    let one_pulse = sb.write(
        "one.json",
        &std::fs::read_to_string(TWO_PULSES).unwrap().replace("\"count\": 2", "\"count\": 1").replace("\"delay_ps\": {\"min\": 0.2, \"max\": 9.0},", ""),
    );
    let out = sb.out();
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["limits", TWO_PULSES, "--ceilings", "-1e13"], "--ceilings"),
        (vec!["limits", TWO_PULSES, "--ceilings", "2e13,2e13"], "--ceilings"),
        (vec!["limits", TWO_PULSES, "--ceilings", "1e19"], "--ceilings"),
        (vec!["limits", TWO_PULSES, "--ceilings", "2e13", "--max-count", "0"], "--max-count"),
        (vec!["limits", TWO_PULSES, "--ceilings", "2e13", "--temperatures", "nan"], "--temperatures"),
        (vec!["limits", TWO_PULSES, "--ceilings", "2e13", "--durations", "0"], "--durations"),
        (vec!["limits", TWO_PULSES, "--ceilings", "2e13", "--waist-um", "-5"], "--waist-um"),
        (vec!["limits", TWO_PULSES, "--ceilings", "2e13", "--effort", "huge"], "--effort"),
        (vec!["limits", s(&one_pulse), "--ceilings", "2e13", "--max-count", "3"], "--max-count"),
    ];
    for (mut args, needle) in cases {
        args.extend(["--out", s(&out), "--quiet"]);
        let r = run(&args);
        assert_field_error(&r, &out, needle);
    }
}

#[test]
fn a_limits_map_stopped_by_sigterm_keeps_what_it_finished_marked_partial() {
    // Checks: SIGTERM stops the searches; the rows finished are written with PARTIAL.txt, exit 4.
    let sb = Sandbox::new("sigterm-limits");
    let out = sb.out();
    let args = ["limits", TWO_PULSES, "--max-count", "5", "--ceilings", "2e13,6e13", "--out", s(&out), "--quiet"];
    let r = run_and_signal(&args, &[(Duration::from_millis(4000), "TERM")]);
    assert_eq!(r.code, Some(4), "stdout:\n{}\nstderr:\n{}", r.stdout, r.stderr);
    let rows = std::fs::read_to_string(out.join("limits.csv")).unwrap().lines().count() - 1;
    assert!(rows > 0 && rows < 10, "{rows} rows");
    assert!(std::fs::read_to_string(out.join("PARTIAL.txt")).unwrap().contains("of 10 combinations finished"));
    assert!(r.elapsed < Duration::from_secs(60), "stopped late: {:?}", r.elapsed);
}
