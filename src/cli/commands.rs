//! What each command does: read the input, call the library, show progress, print what `report`
//! formats and write the files it returns.

use super::signals::{Finish, GRACEFUL, STOP};
use kicktrain::design::Objective;
use kicktrain::design::score::{replay, simulate_scored};
use kicktrain::design::search::{Monitor, design};
use kicktrain::error::Error;
use kicktrain::input::read_text_file;
use kicktrain::report;
use kicktrain::report::output::OutputDir;
use kicktrain::scenario::Scenario;
use kicktrain::shard::{PART_FILE, Part, Shard};
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};

/// Set from --allow-long: lift every scenario's solver.max_steps.
pub static ALLOW_LONG: AtomicBool = AtomicBool::new(false);

/// Read a scenario file; --allow-long lifts its step limit.
pub fn read_scenario(path: &Path) -> Result<Scenario, Error> {
    let text = read_text_file(path)?;
    let mut scenario = Scenario::from_json_str(&text, &path.display().to_string())?;
    if ALLOW_LONG.load(Ordering::SeqCst) {
        scenario.solver.lift_size_limits();
    }
    Ok(scenario)
}

/// Prepare the output folder before any work, so that an output that cannot be written fails at once.
fn prepare_out(out: Option<&Path>, command: &str) -> Result<Option<OutputDir>, Error> {
    out.map(|d| OutputDir::prepare(d, command)).transpose()
}

/// `kicktrain molecules`: the built-in library as a table or JSON.
pub fn molecules(json: bool) -> Result<(), Error> {
    if json {
        println!("{}", serde_json::to_string_pretty(&report::text::molecules_json()).expect("json"));
    } else {
        print!("{}", report::text::molecules_table());
    }
    Ok(())
}

/// `kicktrain simulate`: one scenario, with a progress bar on a terminal.
pub fn run_simulate(path: &Path, out: Option<&Path>, json: bool) -> Result<(), Error> {
    let scenario = read_scenario(path)?;
    let staged = prepare_out(out, "simulate")?;
    // On a terminal, a bar of the symmetry blocks (or chunks of initial states) finished; the total grows
    // as the runs of the command (trace, focal average, goal) plan their blocks.
    let progress = std::sync::Arc::new(kicktrain::simulate::RunProgress::default());
    let sim = if std::io::IsTerminal::is_terminal(&std::io::stderr()) && !json {
        let bar = indicatif::ProgressBar::new(0);
        bar.set_style(
            indicatif::ProgressStyle::with_template("simulating {msg} [{bar:30}] {pos}/{len} blocks ({elapsed}, ETA {eta})")
                .expect("template")
                .progress_chars("=> "),
        );
        bar.set_message(format!("{} at {} K", scenario.molecule.name, scenario.temperature_k));
        std::thread::scope(|scope| {
            let run = scope.spawn(|| simulate_scored(&scenario, progress.clone()));
            while !run.is_finished() {
                let (done, planned) = progress.counts();
                bar.set_length(planned);
                bar.set_position(done);
                std::thread::sleep(std::time::Duration::from_millis(100));
            }
            bar.finish_and_clear();
            run.join().unwrap_or_else(|_| Err(Error::Numerical("the simulation thread failed".into())))
        })
    } else {
        simulate_scored(&scenario, progress)
    };
    let sim = sim?;
    let summary = match staged {
        Some(o) => {
            let summary = report::write_simulation(&sim, o.path())?;
            o.commit()?;
            summary
        }
        None => report::simulation_summary(&sim),
    };
    if json {
        println!("{}", serde_json::to_string_pretty(&summary).expect("json"));
    } else {
        print!("{}", report::text::simulation_text(&summary));
        if let Some(dir) = out {
            println!("wrote {}/summary.json, trace.csv, alignment.svg", dir.display());
        }
    }
    Ok(())
}

/// The objective `kicktrain design` runs when no file is given.
pub const DEFAULT_OBJECTIVE: &str = include_str!("../../objectives/two-pulse-room-temperature.json");

/// Progress bar and Ctrl-C flag for a design search.
struct Progress {
    bar: indicatif::ProgressBar,
    stop: &'static AtomicBool,
    counter: kicktrain::design::search::StageCounter,
}

impl Monitor for Progress {
    fn stage(&self, name: &str, planned: usize) {
        self.counter.restart();
        self.bar.set_length(planned.max(1) as u64);
        self.bar.set_position(0);
        self.bar.reset_eta();
        self.bar.set_prefix(name.to_string());
    }
    fn evaluated(&self, evaluations: usize, best: Option<f64>) {
        let done = self.counter.done(evaluations) as u64;
        if done > self.bar.length().unwrap_or(0) {
            self.bar.set_length(done);
        }
        self.bar.set_position(done);
        if let Some(b) = best {
            self.bar.set_message(format!("best {b:.5} | {evaluations} evaluations"));
        }
    }
    fn interrupted(&self) -> bool {
        self.stop.load(Ordering::Relaxed)
    }
}

/// The objective of a design run: the file (or the built-in example) with --seed, --effort and
/// --time-limit applied. Returns (the file's text, its name, the objective).
pub fn design_input(args: &super::args::DesignArgs) -> Result<(String, String, Objective), Error> {
    let (text, name) = match args.objective.as_deref() {
        Some(p) => (read_text_file(p)?, p.display().to_string()),
        None => (DEFAULT_OBJECTIVE.to_string(), "built-in objective two-pulse-room-temperature.json".to_string()),
    };
    let mut obj = Objective::from_json_str(&text, &name)?;
    obj.override_search(args.seed, args.effort.as_deref(), args.time_limit)?;
    Ok((text, name, obj))
}

/// The progress bar of a design search (hidden with --quiet).
fn design_progress(quiet: bool) -> Progress {
    let bar = if quiet { indicatif::ProgressBar::hidden() } else { indicatif::ProgressBar::new(1) };
    bar.set_style(indicatif::ProgressStyle::with_template("{prefix:>34} [{bar:30}] {pos}/{len} {msg} (ETA {eta})").expect("template").progress_chars("=> "));
    Progress { bar, stop: &STOP, counter: Default::default() }
}

/// `kicktrain design`: the search with a progress bar; a signal stops it with the best design so far.
/// With --shard, the starts of one part (see [`run_design_part`]).
pub fn run_design(args: &super::args::DesignArgs) -> Result<Finish, Error> {
    let (text, name, obj) = design_input(args)?;
    let out = args.out.as_deref();
    let shard = read_shard(args.shard.as_deref(), out)?;
    let staged = prepare_out(out, "design")?;
    GRACEFUL.store(true, Ordering::SeqCst);
    if let Some(sh) = shard {
        return run_design_part(args, &text, &obj, sh, staged);
    }
    if !args.quiet {
        eprintln!("designing: {} ({} pulse(s){}, seed {})", name, obj.space.pulses.len(), if obj.variable_count { " at most" } else { "" }, obj.search.seed);
    }
    let monitor = design_progress(args.quiet);
    let result = design(&obj, &monitor)?;
    monitor.bar.finish_and_clear();
    finish_design(&obj, &result, staged, out, args.json)
}

/// Print a design's summary (or its JSON) and write its files.
fn finish_design(
    obj: &Objective,
    result: &kicktrain::design::search::DesignResult,
    staged: Option<OutputDir>,
    out: Option<&Path>,
    json: bool,
) -> Result<Finish, Error> {
    let summary = match staged {
        Some(o) => {
            let summary = report::design::write_design(obj, result, &replay(obj, result)?, o.path())?;
            o.commit()?;
            summary
        }
        None => report::design::design_summary(obj, result),
    };
    if json {
        println!("{}", serde_json::to_string_pretty(&summary).expect("json"));
    } else {
        print!("{}", report::text::design_text(&summary));
        if let Some(dir) = out {
            println!("wrote {}/design.json, summary.json, trace.csv, design.svg, history.csv, convergence.svg", dir.display());
            println!("replay: kicktrain simulate {}/design.json", dir.display());
        }
    }
    Ok(if result.interrupted { Finish::Partial } else { Finish::Done })
}

/// The part file's record of a design: what a merge needs to finish it.
fn design_record(text: &str, args: &super::args::DesignArgs) -> serde_json::Value {
    serde_json::json!({
        "objective": text,
        "seed": args.seed,
        "effort": args.effort,
        "allow_long": ALLOW_LONG.load(Ordering::SeqCst),
    })
}

/// `kicktrain design --shard K/N`: the starts part K owns, each to its end, written as a part folder.
fn run_design_part(args: &super::args::DesignArgs, text: &str, obj: &Objective, sh: Shard, staged: Option<OutputDir>) -> Result<Finish, Error> {
    let t0 = std::time::Instant::now();
    let monitor = design_progress(args.quiet);
    let part = kicktrain::design::search::design_part(obj, sh, &monitor)?;
    monitor.bar.finish_and_clear();
    let record = design_record(text, args);
    let result = serde_json::json!({ "input": record.clone(), "max_starts": part.max_starts, "starts": part.runs });
    let file = Part {
        dir: Default::default(),
        command: "design".into(),
        fingerprint: kicktrain::shard::fingerprint(&["design", &record.to_string()]),
        shard: sh,
        complete: part.complete,
        argv: std::env::args().collect(),
        run_time_s: t0.elapsed().as_secs_f64(),
        result,
    };
    let sense = obj.goal.sense();
    let best = part.runs.iter().map(|r| r.polished).max_by(|a, b| (sense * a).total_cmp(&(sense * b)));
    println!(
        "part {sh}: {} of {} starts in {:.1} s{}{}",
        part.runs.len(),
        sh.owned(part.max_starts),
        file.run_time_s,
        best.map(|b| format!("; best polished score {b:.5}")).unwrap_or_default(),
        if part.complete { "" } else { " (stopped early)" }
    );
    let outputs = || vec![(PART_FILE, file.to_json())];
    let note = (!part.complete).then(|| format!("part {} of {} stopped by a signal; rerun it before merging.\n", sh.index, sh.count));
    write_and_finish(staged, args.out.as_deref(), outputs, note)
}

/// The design of merged parts: their starts in order, then the search's last stage and the report.
fn merge_design(parts: &[Part], out: Option<&Path>) -> Result<Finish, Error> {
    let record = parts[0].result.get("input").cloned().ok_or_else(|| Error::input("parts", "the design parts lack their input record"))?;
    let text = record.get("objective").and_then(|v| v.as_str()).ok_or_else(|| Error::input("parts", "the design parts lack their objective"))?;
    let mut obj = Objective::from_json_str(text, "the parts' objective")?;
    apply_overrides(&mut obj, record.get("seed").and_then(|v| v.as_u64()), record.get("effort").and_then(|v| v.as_str()))?;
    let mut runs: Vec<kicktrain::design::search::StartRun> = vec![];
    for p in parts {
        let starts = p.result.get("starts").cloned().unwrap_or_default();
        let mut these: Vec<kicktrain::design::search::StartRun> =
            serde_json::from_value(starts).map_err(|e| Error::input("parts", format!("{}: cannot read the starts of {}: {e}", p.dir.display(), PART_FILE)))?;
        runs.append(&mut these);
    }
    let staged = prepare_out(out, "design")?;
    let seconds: f64 = parts.iter().map(|p| p.run_time_s).sum();
    println!("merged {} parts ({} starts; their run times add up to {seconds:.1} s); finishing the search", parts.len(), runs.len());
    let monitor = design_progress(false);
    let mut result = kicktrain::design::search::design_merged(&obj, &runs, &monitor)?;
    monitor.bar.finish_and_clear();
    // The run time reported is the parts' and the merge's together.
    result.run_time_s += seconds;
    finish_design(&obj, &result, staged, out, false)
}

/// Progress bar and Ctrl-C flag of a limits map.
struct MapProgress {
    bar: indicatif::ProgressBar,
}

impl kicktrain::limits::LimitsMonitor for MapProgress {
    fn combination_done(&self) {
        self.bar.inc(1);
    }
    fn interrupted(&self) -> bool {
        STOP.load(Ordering::Relaxed)
    }
}

/// The --seed and --effort overrides of an objective's search settings.
fn apply_overrides(obj: &mut Objective, seed: Option<u64>, effort: Option<&str>) -> Result<(), Error> {
    obj.override_search(seed, effort, None)
}

/// What a limits run needs besides its searches: the objective (with --seed and --effort), the plan and
/// the focus the ceilings are also given as pulse energies at.
pub struct LimitsInput {
    /// The objective file's text.
    pub text: String,
    pub obj: Objective,
    pub plan: kicktrain::limits::LimitsPlan,
    pub energy: Option<kicktrain::report::limits::EnergyScale>,
}

/// Read and check the input of `kicktrain limits`.
pub fn limits_input(args: &super::args::LimitsArgs) -> Result<LimitsInput, Error> {
    use kicktrain::report::limits::EnergyScale;
    let text = read_text_file(&args.objective)?;
    let mut obj = Objective::from_json_str(&text, &args.objective.display().to_string())?;
    apply_overrides(&mut obj, args.seed, args.effort.as_deref())?;
    let plan = kicktrain::limits::LimitsPlan {
        max_count: args.max_count.unwrap_or(obj.space.pulses.len()),
        ceilings_wcm2: args.ceilings.clone(),
        temperatures_k: args.temperatures.clone(),
        durations_fs: args.durations.clone(),
    };
    kicktrain::limits::check_plan(&plan)?;
    let optics_given = args.waist_um.is_some() || args.beam_radius_mm.is_some() || args.wavelength_nm.is_some() || args.focal_length_mm.is_some();
    let energy = if optics_given {
        let focus = kicktrain::optics::Focus {
            energy_mj: 1.0,
            waist_um: args.waist_um,
            beam_radius_mm: args.beam_radius_mm,
            wavelength_nm: args.wavelength_nm,
            focal_length_mm: args.focal_length_mm,
            m2: args.m2,
        };
        focus.validate("").map_err(|e| match e {
            Error::Input { field, message } => Error::input(format!("--{}", field.trim_start_matches('.').replace('_', "-")), message),
            other => other,
        })?;
        Some(EnergyScale { waist_um: focus.waist_m() * 1e6 })
    } else {
        obj.base.focal_average.as_ref().map(|f| EnergyScale { waist_um: f.pump_waist_um })
    };
    Ok(LimitsInput { text, obj, plan, energy })
}

/// The part file's record of a limits run: everything a merge needs to rebuild the map's frame.
fn limits_record(input: &LimitsInput, args: &super::args::LimitsArgs) -> serde_json::Value {
    serde_json::json!({
        "objective": input.text,
        "seed": args.seed,
        "effort": args.effort,
        "max_count": input.plan.max_count,
        "ceilings_wcm2": input.plan.ceilings_wcm2,
        "temperatures_k": input.plan.temperatures_k,
        "durations_fs": input.plan.durations_fs,
        "waist_um": input.energy.map(|e| e.waist_um),
        "allow_long": ALLOW_LONG.load(Ordering::SeqCst),
    })
}

/// Print a finished (or stopped) map and write its files.
fn finish_limits(
    map: &kicktrain::limits::LimitsMap,
    energy: Option<kicktrain::report::limits::EnergyScale>,
    staged: Option<OutputDir>,
    out: Option<&Path>,
) -> Result<Finish, Error> {
    use kicktrain::report::limits::{limits_csv, limits_partial, limits_partial_note, limits_svg, limits_text};
    let partial = limits_partial(map);
    if let Some(p) = &partial {
        println!("{p}");
    }
    print!("{}", limits_text(map, energy));
    let outputs = || vec![("limits.csv", limits_csv(map, energy)), ("limits.svg", limits_svg(map, energy, partial.as_deref()))];
    write_and_finish(staged, out, outputs, partial.as_deref().map(limits_partial_note))
}

/// `kicktrain limits`: designs over pulse counts × ceilings (× temperatures or durations) and the bound
/// (or the searches `--shard` names).
pub fn run_limits(args: &super::args::LimitsArgs) -> Result<Finish, Error> {
    let input = limits_input(args)?;
    let out = args.out.as_deref();
    let shard = read_shard(args.shard.as_deref(), out)?;
    let staged = prepare_out(out, "limits")?;
    GRACEFUL.store(true, Ordering::SeqCst);
    let plan = &input.plan;
    let searches = plan.ceilings_wcm2.len() * plan.temperatures_k.len().max(1) * plan.durations_fs.len().max(1);
    let owned = shard.map(|s| s.owned(searches)).unwrap_or(searches);
    let bar = if args.quiet { indicatif::ProgressBar::hidden() } else { indicatif::ProgressBar::new((owned * plan.max_count) as u64) };
    bar.set_style(
        indicatif::ProgressStyle::with_template("limits [{bar:30}] {pos}/{len} combinations ({elapsed}, ETA {eta})").expect("template").progress_chars("=> "),
    );
    let t0 = std::time::Instant::now();
    let map = kicktrain::limits::limits_part(&input.obj, plan, shard, &MapProgress { bar: bar.clone() })?;
    bar.finish_and_clear();
    let Some(sh) = shard else {
        return finish_limits(&map, input.energy, staged, out);
    };
    let complete = map.part_complete();
    let record = limits_record(&input, args);
    let mut result = map.part_value();
    result["input"] = record.clone();
    let part = Part {
        dir: Default::default(),
        command: "limits".into(),
        fingerprint: kicktrain::shard::fingerprint(&["limits", &record.to_string()]),
        shard: sh,
        complete,
        argv: std::env::args().collect(),
        run_time_s: t0.elapsed().as_secs_f64(),
        result,
    };
    println!(
        "part {sh}: {} of {} combinations in {:.1} s{}",
        map.cells.len(),
        owned * plan.max_count,
        part.run_time_s,
        if complete { "" } else { " (stopped early)" }
    );
    let outputs = || vec![("limits.csv", kicktrain::report::limits::limits_csv(&map, input.energy)), (PART_FILE, part.to_json())];
    let note = (!complete).then(|| format!("part {} of {} stopped by a signal; rerun it before merging.\n", sh.index, sh.count));
    write_and_finish(staged, out, outputs, note)
}

/// The map of merged limits parts: the frame rebuilt from the record in the parts.
fn merge_limits(parts: &[Part], out: Option<&Path>) -> Result<Finish, Error> {
    let record = parts[0].result.get("input").cloned().ok_or_else(|| Error::input("parts", "the limits parts lack their input record"))?;
    let text = record.get("objective").and_then(|v| v.as_str()).ok_or_else(|| Error::input("parts", "the limits parts lack their objective"))?;
    let mut obj = Objective::from_json_str(text, "the parts' objective")?;
    let seed = record.get("seed").and_then(|v| v.as_u64());
    let effort = record.get("effort").and_then(|v| v.as_str());
    apply_overrides(&mut obj, seed, effort)?;
    let numbers = |k: &str| -> Vec<f64> { record.get(k).and_then(|v| v.as_array()).map(|a| a.iter().filter_map(|x| x.as_f64()).collect()).unwrap_or_default() };
    let plan = kicktrain::limits::LimitsPlan {
        max_count: record.get("max_count").and_then(|v| v.as_u64()).unwrap_or(0) as usize,
        ceilings_wcm2: numbers("ceilings_wcm2"),
        temperatures_k: numbers("temperatures_k"),
        durations_fs: numbers("durations_fs"),
    };
    let energy = record.get("waist_um").and_then(|v| v.as_f64()).map(|waist_um| kicktrain::report::limits::EnergyScale { waist_um });
    let results: Vec<serde_json::Value> = parts.iter().map(|p| p.result.clone()).collect();
    let map = kicktrain::limits::LimitsMap::merge(&obj, &plan, &results)?;
    let staged = prepare_out(out, "limits")?;
    println!("merged {} parts (their run times add up to {:.1} s)", parts.len(), map.run_time_s);
    finish_limits(&map, energy, staged, out)
}

/// `kicktrain pendular`: dressed states of a molecule in constant fields.
pub fn run_pendular(name: &str, intensity: f64, static_kv_cm: f64, angle_deg: f64, temperature_k: f64, j_max: u32, json: bool) -> Result<(), Error> {
    let (mol, r) = kicktrain::pendular::listing(name, intensity, static_kv_cm, angle_deg, temperature_k, j_max)?;
    if json {
        println!("{}", serde_json::to_string_pretty(&report::text::pendular_json(&mol.name, intensity, static_kv_cm, temperature_k, &r)).expect("json"));
    } else {
        print!("{}", report::text::pendular_text(&mol.name, intensity, static_kv_cm, temperature_k, j_max, &r));
    }
    Ok(())
}

/// `kicktrain focus`: peak intensity and fluence from pulse energy and focusing.
pub fn run_focus(focus: kicktrain::optics::Focus, fwhm_fs: f64, shape: &str, molecule: Option<&str>, json: bool) -> Result<(), Error> {
    let r = kicktrain::optics::focus_report(&focus, fwhm_fs, shape, molecule)?;
    if json {
        println!("{}", serde_json::to_string_pretty(&report::text::focus_json(&r)).expect("json"));
    } else {
        print!("{}", report::text::focus_text(&r));
    }
    Ok(())
}

/// Read `--shard K/N`; a part needs an output folder.
fn read_shard(shard: Option<&str>, out: Option<&Path>) -> Result<Option<Shard>, Error> {
    let shard = shard.map(Shard::parse).transpose()?;
    if shard.is_some() && out.is_none() {
        return Err(Error::input("--out", "expected a folder: a run with --shard writes its part folder there"));
    }
    Ok(shard)
}

/// A scan's input as one value: the scenario (with --allow-long applied) and its axes.
pub fn scan_input(args: &super::args::ScanArgs) -> Result<(serde_json::Value, kicktrain::scan::Axis, Option<kicktrain::scan::Axis>), Error> {
    use kicktrain::scan::Axis;
    let super::args::ScanArgs { scenario: path, x, from, to, steps, y, y_from, y_to, y_steps, .. } = args;
    let text = read_text_file(path)?;
    let mut base = kicktrain::input::parse_json(&text, &path.display().to_string())?;
    if ALLOW_LONG.load(Ordering::SeqCst)
        && let Some(obj) = base.as_object_mut()
    {
        let solver = obj.entry("solver").or_insert_with(|| serde_json::json!({}));
        if let Some(sv) = solver.as_object_mut() {
            sv.insert("max_steps".into(), serde_json::json!(1e12));
            sv.insert("max_states".into(), serde_json::json!(1e12));
        }
    }
    let xa = Axis::linear(x, *from, *to, *steps)?;
    let ya = match y {
        None => None,
        Some(p) => {
            let (a, b) = (
                y_from.ok_or_else(|| Error::input("y-from", "missing; a 2D scan needs --y-from and --y-to"))?,
                y_to.ok_or_else(|| Error::input("y-to", "missing; a 2D scan needs --y-from and --y-to"))?,
            );
            Some(Axis::linear(p, a, b, *y_steps)?)
        }
    };
    Ok((base, xa, ya))
}

/// What tells the parts of one scan from another's.
fn scan_fingerprint(base: &serde_json::Value, xa: &kicktrain::scan::Axis, ya: Option<&kicktrain::scan::Axis>) -> String {
    let axis = |a: &kicktrain::scan::Axis| format!("{} {:?}", a.path, a.values);
    kicktrain::shard::fingerprint(&["scan", &base.to_string(), &axis(xa), &ya.map(axis).unwrap_or_default()])
}

/// `kicktrain scan`: a 1D or 2D grid over scenario fields (or the part of it `--shard` names).
pub fn run_scan(args: &super::args::ScanArgs) -> Result<Finish, Error> {
    use kicktrain::scan::scan;
    let out = args.out.as_deref();
    let (base, xa, ya) = scan_input(args)?;
    let shard = read_shard(args.shard.as_deref(), out)?;
    let points = xa.values.len() * ya.as_ref().map(|a| a.values.len()).unwrap_or(1);
    let total = shard.map(|s| s.owned(points)).unwrap_or(points);
    let staged = prepare_out(out, "scan")?;
    GRACEFUL.store(true, Ordering::SeqCst);
    let bar = if args.quiet { indicatif::ProgressBar::hidden() } else { indicatif::ProgressBar::new(total as u64) };
    bar.set_style(indicatif::ProgressStyle::with_template("scan [{bar:30}] {pos}/{len} (ETA {eta})").expect("template").progress_chars("=> "));
    let t0 = std::time::Instant::now();
    let r = scan(&base, &xa, ya.as_ref(), shard, &|| bar.inc(1), &STOP)?;
    bar.finish_and_clear();
    if r.finished() == 0 && total > 0 {
        return Err(Error::Interrupted);
    }
    if let Some(sh) = shard {
        let complete = r.part_complete(sh);
        let part = Part {
            dir: Default::default(),
            command: "scan".into(),
            fingerprint: scan_fingerprint(&base, &xa, ya.as_ref()),
            shard: sh,
            complete,
            argv: std::env::args().collect(),
            run_time_s: t0.elapsed().as_secs_f64(),
            result: r.part_value(),
        };
        println!("part {sh}: {} of {total} points in {:.2} s{}", r.finished(), part.run_time_s, if complete { "" } else { " (stopped early)" });
        let label = format!("part {} of {}", sh.index, sh.count);
        let outputs = || vec![("scan.csv", report::scan::scan_csv(&r)), ("scan.svg", report::scan::scan_svg(&r, Some(&label))), (PART_FILE, part.to_json())];
        let note = (!complete).then(|| format!("{label} stopped by a signal after {} of {total} points; rerun it before merging.\n", r.finished()));
        return write_and_finish(staged, out, outputs, note);
    }
    let partial = report::scan::scan_partial(&r);
    if let Some(p) = &partial {
        println!("{p}");
    }
    print!("{}", report::scan::scan_summary(&r, t0.elapsed().as_secs_f64()));
    let outputs = || vec![("scan.csv", report::scan::scan_csv(&r)), ("scan.svg", report::scan::scan_svg(&r, partial.as_deref()))];
    write_and_finish(staged, out, outputs, partial.as_deref().map(report::scan::scan_partial_note))
}

/// The noise of a tolerance run from its options.
fn noise_of(args: &super::args::ToleranceArgs) -> kicktrain::tolerance::Noise {
    kicktrain::tolerance::Noise { jitter_fs: args.jitter_fs, energy_percent: args.energy_noise_percent, phase_rad: args.phase_noise_rad }
}

/// `kicktrain tolerance`: Monte Carlo over timing, energy and phase noise (or the draws `--shard` names).
pub fn run_tolerance(args: &super::args::ToleranceArgs) -> Result<Finish, Error> {
    let out = args.out.as_deref();
    let text = read_text_file(&args.scenario)?;
    let scenario = read_scenario(&args.scenario)?;
    let shard = read_shard(args.shard.as_deref(), out)?;
    let noise = noise_of(args);
    let staged = prepare_out(out, "tolerance")?;
    GRACEFUL.store(true, Ordering::SeqCst);
    let t0 = std::time::Instant::now();
    let r = kicktrain::tolerance::tolerance_part(&scenario, noise, args.samples, args.seed, shard, &STOP)?;
    let goal = scenario.goal.expect("checked by tolerance()");
    if let Some(sh) = shard {
        let complete = r.part_complete(sh);
        let owned = sh.owned(args.samples);
        let settings = format!("{:?} {} {} {}", noise, args.samples, args.seed, ALLOW_LONG.load(Ordering::SeqCst));
        let mut result = r.part_value(goal.sense());
        result["scenario"] = serde_json::Value::String(text.clone());
        result["noise"] = serde_json::json!({"jitter_fs": noise.jitter_fs, "energy_noise_percent": noise.energy_percent, "phase_noise_rad": noise.phase_rad});
        result["seed"] = serde_json::json!(args.seed);
        let part = Part {
            dir: Default::default(),
            command: "tolerance".into(),
            fingerprint: kicktrain::shard::fingerprint(&["tolerance", &text, &settings]),
            shard: sh,
            complete,
            argv: std::env::args().collect(),
            run_time_s: t0.elapsed().as_secs_f64(),
            result,
        };
        println!("part {sh}: {} of {owned} draws in {:.2} s{}", r.samples.len(), part.run_time_s, if complete { "" } else { " (stopped early)" });
        let outputs = || vec![("tolerance.csv", report::scan::tolerance_csv(&r)), (PART_FILE, part.to_json())];
        let note = (!complete)
            .then(|| format!("part {} of {} stopped by a signal after {} of {owned} draws; rerun it before merging.\n", sh.index, sh.count, r.samples.len()));
        return write_and_finish(staged, out, outputs, note);
    }
    let partial = report::scan::tolerance_partial(&r);
    if let Some(p) = &partial {
        println!("{p}");
    }
    print!("{}", report::scan::tolerance_summary(&goal, noise, args.seed, &r, t0.elapsed().as_secs_f64()));
    let outputs = || vec![("tolerance.csv", report::scan::tolerance_csv(&r)), ("tolerance.svg", report::scan::tolerance_svg(&goal, noise, &r))];
    write_and_finish(staged, out, outputs, partial.as_deref().map(report::scan::tolerance_partial_note))
}

/// `kicktrain merge`: the parts of a split scan or tolerance run, checked and written as one run.
pub fn run_merge(dirs: &[std::path::PathBuf], out: Option<&Path>) -> Result<Finish, Error> {
    let parts = kicktrain::shard::gather(dirs)?;
    let results: Vec<serde_json::Value> = parts.iter().map(|p| p.result.clone()).collect();
    let seconds: f64 = parts.iter().map(|p| p.run_time_s).sum();
    let n = parts.len();
    match parts[0].command.as_str() {
        "scan" => {
            let r = kicktrain::scan::ScanResult::merge(&results)?;
            if r.partial() {
                return Err(Error::input(
                    "parts",
                    format!(
                        "the {n} parts leave {} points of the scan without a value; expected every point once",
                        r.done.iter().flatten().filter(|d| !**d).count()
                    ),
                ));
            }
            let staged = prepare_out(out, "scan")?;
            println!("merged {n} parts (their run times add up to {seconds:.1} s)");
            print!("{}", report::scan::scan_summary(&r, seconds));
            let outputs = || vec![("scan.csv", report::scan::scan_csv(&r)), ("scan.svg", report::scan::scan_svg(&r, None))];
            write_and_finish(staged, out, outputs, None)
        }
        "tolerance" => {
            let r = kicktrain::tolerance::ToleranceResult::merge(&results)?;
            if r.samples.len() < r.requested {
                return Err(Error::input("parts", format!("the {n} parts hold {} of {} draws; expected every draw once", r.samples.len(), r.requested)));
            }
            let first = &results[0];
            let text = first.get("scenario").and_then(|v| v.as_str()).ok_or_else(|| Error::input("parts", "the parts lack their scenario"))?;
            let scenario = Scenario::from_json_str(text, "the parts' scenario")?;
            let goal = scenario.goal.ok_or_else(|| Error::input("parts", "the parts' scenario has no goal"))?;
            let number = |k: &str| first.get("noise").and_then(|v| v.get(k)).and_then(|v| v.as_f64()).unwrap_or(0.0);
            let noise = kicktrain::tolerance::Noise {
                jitter_fs: number("jitter_fs"),
                energy_percent: number("energy_noise_percent"),
                phase_rad: number("phase_noise_rad"),
            };
            let seed = first.get("seed").and_then(|v| v.as_u64()).unwrap_or(0);
            let staged = prepare_out(out, "tolerance")?;
            println!("merged {n} parts (their run times add up to {seconds:.1} s)");
            print!("{}", report::scan::tolerance_summary(&goal, noise, seed, &r, seconds));
            let outputs = || vec![("tolerance.csv", report::scan::tolerance_csv(&r)), ("tolerance.svg", report::scan::tolerance_svg(&goal, noise, &r))];
            write_and_finish(staged, out, outputs, None)
        }
        "limits" => merge_limits(&parts, out),
        "design" => merge_design(&parts, out),
        other => Err(Error::input("parts", format!("parts of `{other}` cannot be merged by this kicktrain; expected scan, tolerance, limits or design parts"))),
    }
}

/// The end of a scan or tolerance run: write the `outputs` (name, contents) into the prepared folder, then
/// PARTIAL.txt holding `partial_note` when the run was stopped; commit it and say so; print the laser-safety caution.
fn write_and_finish(
    staged: Option<OutputDir>,
    out: Option<&Path>,
    outputs: impl FnOnce() -> Vec<(&'static str, String)>,
    partial_note: Option<String>,
) -> Result<Finish, Error> {
    if let Some(o) = staged {
        let files = outputs();
        for (name, contents) in &files {
            report::write_file(o.path(), name, contents)?;
        }
        if let Some(note) = &partial_note {
            report::write_file(o.path(), "PARTIAL.txt", note)?;
        }
        o.commit()?;
        let names: Vec<&str> = files.iter().map(|(name, _)| *name).collect();
        let partial_file = if partial_note.is_some() { ", PARTIAL.txt" } else { "" };
        println!("wrote {}/{}{partial_file}", out.map(|d| d.display().to_string()).unwrap_or_default(), names.join(", "));
    }
    println!("{}", report::LASER_SAFETY);
    Ok(if partial_note.is_some() { Finish::Partial } else { Finish::Done })
}
