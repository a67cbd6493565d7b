//! `kicktrain cluster`: Slurm job-array scripts for a scan, tolerance run, limits map or design split
//! into parts, and the merge job that runs after them. Time and memory requests come from a probe run of
//! one item (a point, a draw, a search or a start) here.

use super::args::{ClusterArgs, ClusterJob};
use super::commands::{ALLOW_LONG, design_input, limits_input, read_scenario, scan_input};
use super::signals::Finish;
use kicktrain::error::Error;
use kicktrain::report;
use kicktrain::report::output::OutputDir;
use kicktrain::shard::{Shard, shell_quote};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

/// Peak resident memory of this process so far, MB.
fn peak_memory_mb() -> f64 {
    // SAFETY: getrusage fills the struct it is given.
    let mut u: libc::rusage = unsafe { std::mem::zeroed() };
    if unsafe { libc::getrusage(libc::RUSAGE_SELF, &mut u) } == 0 { u.ru_maxrss as f64 / 1024.0 } else { 0.0 }
}

/// Slurm's time format, H:MM:SS (D-HH:MM:SS from a day up).
fn slurm_time(seconds: f64) -> String {
    let s = seconds.ceil() as u64;
    let (d, h, m, sec) = (s / 86400, (s / 3600) % 24, (s / 60) % 60, s % 60);
    if d > 0 { format!("{d}-{h:02}:{m:02}:{sec:02}") } else { format!("{h}:{m:02}:{sec:02}") }
}

/// The time a task asks for: its items at the probe's pace with room to spare (×3, the probe ran on
/// this machine and the cluster's may be slower or shared), at least 10 minutes.
fn time_request(items: usize, probe_s: f64) -> f64 {
    (3.0 * items as f64 * probe_s + 120.0).max(600.0)
}

/// The memory a task asks for, MB: twice the probe's peak plus 256 MB, rounded up to 64 MB.
fn memory_request_mb(peak_mb: f64) -> u64 {
    let mb = 2.0 * peak_mb + 256.0;
    ((mb / 64.0).ceil() * 64.0) as u64
}

/// An absolute form of `p` (relative to the current folder).
fn absolute(p: &Path) -> Result<PathBuf, Error> {
    if p.is_absolute() {
        return Ok(p.to_path_buf());
    }
    let here = std::env::current_dir().map_err(|e| Error::Io(format!("cannot read the current folder: {e}")))?;
    Ok(here.join(p))
}

/// `kicktrain cluster`.
pub fn run_cluster(args: &ClusterArgs) -> Result<Finish, Error> {
    if !(1..=100_000).contains(&args.shards) {
        return Err(Error::input("--shards", format!("expected 1 to 100000 parts, got {}", args.shards)));
    }
    if !(1..=1024).contains(&args.cpus_per_task) {
        return Err(Error::input("--cpus-per-task", format!("expected 1 to 1024, got {}", args.cpus_per_task)));
    }
    for (key, v) in [("--partition", &args.partition), ("--account", &args.account)] {
        if let Some(v) = v
            && (v.is_empty() || !v.chars().all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c)))
        {
            return Err(Error::input(key, format!("expected a Slurm name (letters, digits, - _ .), got \"{v}\"")));
        }
    }
    let (input, out, shard_flag) = match &args.job {
        ClusterJob::Scan(a) => (Some(&a.scenario), a.out.as_deref(), &a.shard),
        ClusterJob::Tolerance(a) => (Some(&a.scenario), a.out.as_deref(), &a.shard),
        ClusterJob::Limits(a) => (Some(&a.objective), a.out.as_deref(), &a.shard),
        ClusterJob::Design(a) => (a.objective.as_ref(), a.out.as_deref(), &a.shard),
    };
    if shard_flag.is_some() {
        return Err(Error::input("--shard", "cluster sets each task's part itself; expected no --shard"));
    }
    let out = out.ok_or_else(|| Error::input("--out", "expected the run folder (it receives the scripts, the parts and the merged result)"))?;
    let run = absolute(out)?;
    let text = match input {
        Some(p) => kicktrain::input::read_text_file(p)?,
        None => super::commands::DEFAULT_OBJECTIVE.to_string(),
    };
    let exe = std::env::current_exe().map_err(|e| Error::Io(format!("cannot find the kicktrain binary: {e}")))?;
    let input_copy = run.join("input.json");
    let quote = |p: &Path| shell_quote(&p.display().to_string());
    let never = AtomicBool::new(false);
    // Check the whole input and time one item (the first point, or the nominal run and one draw).
    let (command, items, what, mut words, probe_s) = match &args.job {
        ClusterJob::Scan(a) => {
            let (base, xa, ya) = scan_input(a)?;
            let points = xa.values.len() * ya.as_ref().map(|y| y.values.len()).unwrap_or(1);
            eprintln!("probing: one point of {points} …");
            let t0 = Instant::now();
            kicktrain::scan::scan(&base, &xa, ya.as_ref(), Some(Shard { index: 0, count: points }), &|| {}, &never)?;
            let mut w = vec![
                "scan".to_string(),
                quote(&input_copy),
                "--x".into(),
                shell_quote(&a.x),
                "--from".into(),
                a.from.to_string(),
                "--to".into(),
                a.to.to_string(),
            ];
            w.extend(["--steps".into(), a.steps.to_string()]);
            if let Some(y) = &a.y {
                w.extend([
                    "--y".into(),
                    shell_quote(y),
                    "--y-from".into(),
                    a.y_from.unwrap_or(0.0).to_string(),
                    "--y-to".into(),
                    a.y_to.unwrap_or(0.0).to_string(),
                ]);
                w.extend(["--y-steps".into(), a.y_steps.to_string()]);
            }
            w.push("--quiet".into());
            ("scan", points, "points", w, t0.elapsed().as_secs_f64())
        }
        ClusterJob::Tolerance(a) => {
            let scenario = read_scenario(&a.scenario)?;
            let noise = kicktrain::tolerance::Noise { jitter_fs: a.jitter_fs, energy_percent: a.energy_noise_percent, phase_rad: a.phase_noise_rad };
            // Checks every setting and runs the nominal design and the first draw.
            let t0 = Instant::now();
            kicktrain::tolerance::tolerance_part(&scenario, noise, a.samples, a.seed, Some(Shard { index: 0, count: a.samples.max(1) }), &never)?;
            let w = vec![
                "tolerance".to_string(),
                quote(&input_copy),
                "--jitter-fs".into(),
                a.jitter_fs.to_string(),
                "--energy-noise-percent".into(),
                a.energy_noise_percent.to_string(),
                "--phase-noise-rad".into(),
                a.phase_noise_rad.to_string(),
                "--samples".into(),
                a.samples.to_string(),
                "--seed".into(),
                a.seed.to_string(),
            ];
            // Each task also runs the nominal design once: count it as one more draw.
            ("tolerance", a.samples, "draws", w, 0.5 * t0.elapsed().as_secs_f64())
        }
        ClusterJob::Limits(a) => {
            let input = limits_input(a)?;
            let plan = &input.plan;
            let searches = plan.ceilings_wcm2.len() * plan.temperatures_k.len().max(1) * plan.durations_fs.len().max(1);
            eprintln!("probing: one of {searches} searches (counts 1 to {}) …", plan.max_count);
            let t0 = Instant::now();
            kicktrain::limits::limits_part(&input.obj, plan, Some(Shard { index: 0, count: searches }), &kicktrain::limits::Quiet)?;
            let list = |v: &[f64]| v.iter().map(|x| x.to_string()).collect::<Vec<_>>().join(",");
            let mut w = vec![
                "limits".to_string(),
                quote(&input_copy),
                "--max-count".into(),
                plan.max_count.to_string(),
                "--ceilings".into(),
                list(&plan.ceilings_wcm2),
            ];
            if !plan.temperatures_k.is_empty() {
                w.extend(["--temperatures".into(), list(&plan.temperatures_k)]);
            }
            if !plan.durations_fs.is_empty() {
                w.extend(["--durations".into(), list(&plan.durations_fs)]);
            }
            for (flag, v) in [
                ("--waist-um", a.waist_um),
                ("--beam-radius-mm", a.beam_radius_mm),
                ("--wavelength-nm", a.wavelength_nm),
                ("--focal-length-mm", a.focal_length_mm),
            ] {
                if let Some(v) = v {
                    w.extend([flag.to_string(), v.to_string()]);
                }
            }
            w.extend(["--m2".into(), a.m2.to_string()]);
            if let Some(s) = a.seed {
                w.extend(["--seed".into(), s.to_string()]);
            }
            if let Some(e) = &a.effort {
                w.extend(["--effort".into(), shell_quote(e)]);
            }
            w.push("--quiet".into());
            ("limits", searches, "searches", w, t0.elapsed().as_secs_f64())
        }
        ClusterJob::Design(a) => {
            let (_, _, obj) = design_input(a)?;
            let d = kicktrain::design::search::design_part_plan(&obj)?;
            eprintln!("probing: one of {} starts …", d.max_starts);
            let t0 = Instant::now();
            kicktrain::design::search::design_part(&obj, Shard { index: 0, count: d.max_starts }, &kicktrain::design::search::Silent)?;
            let mut w = vec!["design".to_string(), quote(&input_copy)];
            if let Some(s) = a.seed {
                w.extend(["--seed".into(), s.to_string()]);
            }
            if let Some(e) = &a.effort {
                w.extend(["--effort".into(), shell_quote(e)]);
            }
            w.push("--quiet".into());
            ("design", d.max_starts, "starts", w, t0.elapsed().as_secs_f64())
        }
    };
    let shards = args.shards.min(items.max(1));
    let per_task = items.div_ceil(shards) + usize::from(command == "tolerance");
    let peak = peak_memory_mb();
    let (time, mem) = (time_request(per_task, probe_s), memory_request_mb(peak));
    if ALLOW_LONG.load(Ordering::SeqCst) {
        words.push("--allow-long".into());
    }
    let parts_dir = run.join("parts");
    let logs = run.join("logs");
    let head = |name: &str, extra: &[String]| -> String {
        let mut s = format!(
            "#!/bin/bash\n# Written by kicktrain cluster ({command} of {items} {what} in {shards} parts).\n# {}\n#SBATCH --job-name=kicktrain-{name}\n",
            report::LASER_SAFETY
        );
        for e in extra {
            s.push_str(&format!("#SBATCH {e}\n"));
        }
        if let Some(p) = &args.partition {
            s.push_str(&format!("#SBATCH --partition={p}\n"));
        }
        if let Some(a) = &args.account {
            s.push_str(&format!("#SBATCH --account={a}\n"));
        }
        s
    };
    let array = head(
        command,
        &[
            format!("--array=0-{}", shards - 1),
            format!("--time={}", slurm_time(time)),
            format!("--mem={mem}M"),
            format!("--cpus-per-task={}", args.cpus_per_task),
            format!("--output={}/part-%a.out", logs.display()),
            format!("--chdir={}", run.display()),
            // SIGTERM three minutes before the time limit: the task finishes its current item and writes
            // its part marked incomplete (Slurm's own SIGTERM at the limit leaves only its KillWait).
            "--signal=B:TERM@180".into(),
        ],
    ) + &format!(
        "# Probe on the machine that wrote this: one of the {what} took {probe_s:.2} s, peak memory {peak:.0} MB; a task holds up to {per_task}.\n\
         # Each task writes {parts}/K whole or not at all; a task stopped at its time limit writes what it finished, marked partial.\n\
         export RAYON_NUM_THREADS=\"${{SLURM_CPUS_PER_TASK:-{cpus}}}\"\n\
         exec {exe} {words} --shard \"$SLURM_ARRAY_TASK_ID/{shards}\" --out \"{parts}/$SLURM_ARRAY_TASK_ID\"\n",
        parts = parts_dir.display(),
        cpus = args.cpus_per_task,
        exe = quote(&exe),
        words = words.join(" "),
    );
    // A design's merge finishes the search (full-solver scoring and refinement, the single-pulse
    // baseline): give it the time of two starts and the tasks' CPUs and memory.
    let (merge_time, merge_mem, merge_cpus) =
        if command == "design" { (slurm_time(time_request(2, probe_s).max(1800.0)), mem.max(2048), args.cpus_per_task) } else { ("0:30:00".into(), 2048, 1) };
    let merge = head(
        "merge",
        &[
            format!("--time={merge_time}"),
            format!("--mem={merge_mem}M"),
            format!("--cpus-per-task={merge_cpus}"),
            format!("--output={}/merge.out", logs.display()),
            format!("--chdir={}", run.display()),
            "--kill-on-invalid-dep=yes".into(),
        ],
    ) + &format!(
        "# Runs once every task of the array succeeded (submit with --dependency=afterok:ARRAY_JOB). Run the same line by\n\
         # hand after a failed task: it names each part that is missing or stopped and the command that reruns it.\n\
         export RAYON_NUM_THREADS=\"${{SLURM_CPUS_PER_TASK:-{merge_cpus}}}\"\n\
         exec {exe} merge {parts}/* --out {result}\n",
        exe = quote(&exe),
        parts = quote(&parts_dir),
        result = quote(&run.join("result")),
    );
    let staged = OutputDir::prepare(out, "cluster")?;
    for (name, contents) in [("input.json", text.as_str()), ("array.sbatch", &array), ("merge.sbatch", &merge)] {
        report::write_file(staged.path(), name, contents)?;
    }
    for d in ["parts", "logs"] {
        std::fs::create_dir(staged.path().join(d)).map_err(|e| Error::Io(format!("cannot create {d} in {}: {e}", staged.path().display())))?;
    }
    staged.commit()?;
    let shown = out.display();
    println!("wrote {shown}/array.sbatch, merge.sbatch, input.json (and the empty folders parts, logs)");
    println!(
        "{items} {what} in {shards} parts of up to {per_task}; probe: {probe_s:.2} s per item, peak {peak:.0} MB here; each task asks for {} and {mem} MB",
        slurm_time(time)
    );
    println!("submit:\n  jid=$(sbatch --parsable {shown}/array.sbatch) && sbatch --dependency=afterok:${{jid%%;*}} {shown}/merge.sbatch");
    println!("the merged files appear in {shown}/result; the logs in {shown}/logs");
    println!("{}", report::LASER_SAFETY);
    Ok(Finish::Done)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slurm_times_read_as_slurm_writes_them() {
        // Slurm's --time formats "hours:minutes:seconds" and "days-hours:minutes:seconds" (sbatch manual).
        assert_eq!(slurm_time(59.2), "0:01:00");
        assert_eq!(slurm_time(3600.0), "1:00:00");
        assert_eq!(slurm_time(90061.0), "1-01:01:01");
        assert_eq!(time_request(10, 1.0), 600.0);
        assert_eq!(time_request(100, 10.0), 3120.0);
        assert_eq!(memory_request_mb(100.0), 512);
    }
}
