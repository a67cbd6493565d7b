//! Runs split with --shard and put back together with `kicktrain merge` equal the run they were split
//! from, byte for byte, for any split; a merge refuses parts that are missing, doubled, stopped or from
//! another input, names the command that reruns each missing or stopped part, and writes nothing then.

use std::path::{Path, PathBuf};
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_kicktrain");

/// Two 50 fs pulses on N2 at 300 K in the kick model (milliseconds a point), with a goal for tolerance runs.
const SCENARIO: &str = r#"{"molecule": "N2", "temperature_k": 300,
 "pulses": [{"center_ps": 0, "fwhm_fs": 50, "peak_intensity_wcm2": 3e13}, {"center_ps": 3, "fwhm_fs": 50, "peak_intensity_wcm2": 3e13}],
 "window": {"start_ps": 3.2, "stop_ps": 12, "step_fs": 50}, "solver": {"method": "kick"},
 "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.2, 8.0], "step_fs": 20}}"#;

fn sandbox(tag: &str) -> PathBuf {
    let nanos = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_nanos()).unwrap_or(0);
    let dir = std::env::temp_dir().join(format!("kicktrain-shards-{tag}-{}-{nanos}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// Run the binary in `dir`; (exit code, stdout, stderr).
fn run(dir: &Path, args: &[&str]) -> (i32, String, String) {
    let o = Command::new(BIN).args(args).current_dir(dir).output().expect("run kicktrain");
    (o.status.code().unwrap_or(-1), String::from_utf8_lossy(&o.stdout).into_owned(), String::from_utf8_lossy(&o.stderr).into_owned())
}

const SCAN: [&str; 15] = [
    "scan",
    "s.json",
    "--x",
    "pulses[1].center_ps",
    "--from",
    "1",
    "--to",
    "4",
    "--steps",
    "7",
    "--y",
    "pulses[1].peak_intensity_wcm2",
    "--y-from",
    "0",
    "--y-to",
];

fn scan_args<'a>(extra: &[&'a str]) -> Vec<&'a str> {
    let mut a: Vec<&str> = SCAN.to_vec();
    a.extend(["4e13", "--y-steps", "5", "--quiet"]);
    a.extend(extra);
    a
}

#[test]
fn any_split_of_a_scan_merges_to_the_unsplit_files() {
    let dir = sandbox("scan");
    std::fs::write(dir.join("s.json"), SCENARIO).unwrap();
    let (code, _, err) = run(&dir, &scan_args(&["--out", "whole"]));
    assert_eq!(code, 0, "{err}");
    let whole_csv = std::fs::read(dir.join("whole/scan.csv")).unwrap();
    // 35 points: one part, parts of unequal size, more parts than points (some parts hold none).
    for n in [1usize, 2, 3, 8, 40] {
        let parts = dir.join(format!("parts{n}"));
        for k in 0..n {
            let (shard, out) = (format!("{k}/{n}"), format!("parts{n}/{k}"));
            let (code, _, err) = run(&dir, &scan_args(&["--shard", &shard, "--out", &out]));
            assert_eq!(code, 0, "part {shard}: {err}");
            assert!(parts.join(k.to_string()).join("part.json").is_file());
        }
        // Parts in any order.
        let dirs: Vec<String> = (0..n).rev().map(|k| format!("parts{n}/{k}")).collect();
        let mut args = vec!["merge"];
        args.extend(dirs.iter().map(String::as_str));
        let out = format!("merged{n}");
        args.extend(["--out", &out]);
        let (code, stdout, err) = run(&dir, &args);
        assert_eq!(code, 0, "{n} parts: {err}");
        assert!(stdout.contains(&format!("merged {n} parts")), "{stdout}");
        assert_eq!(std::fs::read(dir.join(&out).join("scan.csv")).unwrap(), whole_csv, "{n} parts: scan.csv differs from the unsplit run");
        assert_eq!(std::fs::read(dir.join(&out).join("scan.svg")).unwrap(), std::fs::read(dir.join("whole/scan.svg")).unwrap());
    }
    // A missing part: named with the command that reruns it; nothing written.
    std::fs::remove_dir_all(dir.join("parts3/1")).unwrap();
    let (code, _, err) = run(&dir, &["merge", "parts3/0", "parts3/2", "--out", "broken"]);
    assert_eq!(code, 2, "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("part 1 is missing") && err.contains("--shard 1/3 --out parts3/1"), "{err}");
    assert!(!dir.join("broken").exists());
    // The printed command makes the missing part, and the merge then succeeds.
    let rerun = err.split("rerun: ").nth(1).unwrap().trim();
    let words: Vec<&str> = rerun.split(' ').skip(1).map(|w| w.trim_matches('\'')).collect();
    let (code, _, e) = run(&dir, &words);
    assert_eq!(code, 0, "{rerun}: {e}");
    let (code, _, e) = run(&dir, &["merge", "parts3/0", "parts3/1", "parts3/2", "--out", "again"]);
    assert_eq!(code, 0, "{e}");
    assert_eq!(std::fs::read(dir.join("again/scan.csv")).unwrap(), whole_csv);
    // A part given twice.
    let (code, _, err) = run(&dir, &["merge", "parts3/0", "parts3/1", "parts3/2", "parts3/2", "--out", "broken"]);
    assert_eq!(code, 2);
    assert!(err.contains("appears twice"), "{err}");
    // A part stopped early (as a time limit leaves it).
    let pj = dir.join("parts3/2/part.json");
    let text = std::fs::read_to_string(&pj).unwrap().replace("\"complete\": true", "\"complete\": false");
    std::fs::write(&pj, text).unwrap();
    let (code, _, err) = run(&dir, &["merge", "parts3/0", "parts3/1", "parts3/2", "--out", "broken"]);
    assert_eq!(code, 2);
    assert!(err.contains("part 2 (parts3/2) stopped before its end") && err.contains("--shard 2/3"), "{err}");
    // A part of another scan (other axis values).
    let (code, _, e) =
        run(&dir, &["scan", "s.json", "--x", "pulses[1].center_ps", "--from", "1", "--to", "5", "--steps", "7", "--shard", "1/2", "--out", "other", "--quiet"]);
    assert_eq!(code, 0, "{e}");
    let (code, _, err) = run(&dir, &["merge", "parts2/0", "other", "--out", "broken"]);
    assert_eq!(code, 2);
    assert!(err.contains("belongs to another input"), "{err}");
    assert!(!dir.join("broken").exists());
    // Bad splits name the option.
    for bad in ["3/3", "x", "1/0"] {
        let (code, _, err) = run(&dir, &scan_args(&["--shard", bad, "--out", "p"]));
        assert_eq!(code, 2, "{bad}");
        assert!(err.starts_with("error: --shard:"), "{err}");
    }
    let (code, _, err) = run(&dir, &scan_args(&["--shard", "0/2"]));
    assert_eq!(code, 2);
    assert!(err.starts_with("error: --out:"), "{err}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn a_split_tolerance_run_merges_to_the_unsplit_files() {
    let dir = sandbox("tolerance");
    std::fs::write(dir.join("s.json"), SCENARIO).unwrap();
    let base = ["tolerance", "s.json", "--jitter-fs", "30", "--energy-noise-percent", "4", "--samples", "23", "--seed", "5"];
    let with = |extra: &[&'static str]| -> Vec<&'static str> { base.iter().copied().chain(extra.iter().copied()).collect() };
    let (code, whole_out, err) = run(&dir, &with(&["--out", "whole"]));
    assert_eq!(code, 0, "{err}");
    // 23 draws: 2 and 5 parts, and 30 parts (seven of them own no draw).
    for n in [2usize, 5, 30] {
        for k in 0..n {
            let (shard, out) = (format!("{k}/{n}"), format!("p{n}/{k}"));
            let mut a = with(&[]);
            a.extend(["--shard", &shard, "--out", &out]);
            let (code, _, err) = run(&dir, &a);
            assert_eq!(code, 0, "{err}");
        }
        let dirs: Vec<String> = (0..n).map(|k| format!("p{n}/{k}")).collect();
        let mut a = vec!["merge"];
        a.extend(dirs.iter().map(String::as_str));
        let out = format!("m{n}");
        a.extend(["--out", &out]);
        let (code, stdout, err) = run(&dir, &a);
        assert_eq!(code, 0, "{err}");
        for f in ["tolerance.csv", "tolerance.svg"] {
            assert_eq!(std::fs::read(dir.join(&out).join(f)).unwrap(), std::fs::read(dir.join("whole").join(f)).unwrap(), "{n} parts: {f}");
        }
        // The statistics line (mean, spread, worst decile) is the unsplit run's.
        let stats = |s: &str| s.lines().find(|l| l.contains("mean")).map(|l| l.split("; ").next().unwrap().to_string());
        assert_eq!(stats(&stdout), stats(&whole_out));
    }
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn a_split_limits_map_merges_to_the_unsplit_map() {
    let dir = sandbox("limits");
    let objective = Path::new(env!("CARGO_MANIFEST_DIR")).join("objectives/two-pulse-room-temperature.json");
    let objective = objective.to_str().unwrap();
    let base = ["limits", objective, "--max-count", "2", "--ceilings", "3e13,2e13,4e13", "--effort", "quick", "--quiet"];
    let with = |extra: &[&'static str]| -> Vec<String> { base.iter().chain(extra).map(|s| s.to_string()).collect() };
    let args = with(&["--out", "whole"]);
    let (code, _, err) = run(&dir, &args.iter().map(String::as_str).collect::<Vec<_>>());
    assert_eq!(code, 0, "{err}");
    // Three (setting, ceiling) searches in four parts: part 3 owns none.
    for k in 0..4 {
        let (shard, out) = (format!("{k}/4"), format!("p/{k}"));
        let mut a = with(&[]);
        a.extend(["--shard".to_string(), shard, "--out".to_string(), out]);
        let (code, _, err) = run(&dir, &a.iter().map(String::as_str).collect::<Vec<_>>());
        assert_eq!(code, 0, "{err}");
    }
    let (code, stdout, err) = run(&dir, &["merge", "p/3", "p/1", "p/0", "p/2", "--out", "merged"]);
    assert_eq!(code, 0, "{err}");
    assert!(stdout.contains("merged 4 parts"), "{stdout}");
    // Every column but the measured run time of each search (column run_time_s).
    let table = |p: &str| -> Vec<Vec<String>> {
        let text = std::fs::read_to_string(dir.join(p).join("limits.csv")).unwrap();
        let head: Vec<&str> = text.lines().next().unwrap().split(',').collect();
        let skip = head.iter().position(|h| *h == "run_time_s").unwrap();
        text.lines().map(|l| l.split(',').enumerate().filter(|(i, _)| *i != skip).map(|(_, x)| x.to_string()).collect()).collect()
    };
    let whole = table("whole");
    assert_eq!(whole.len(), 1 + 3 * 2);
    assert_eq!(table("merged"), whole);
    assert_eq!(std::fs::read(dir.join("merged/limits.svg")).unwrap(), std::fs::read(dir.join("whole/limits.svg")).unwrap());
    let _ = std::fs::remove_dir_all(&dir);
}

#[path = "common/objectives.rs"]
mod objectives;
use objectives::TWO_PULSES_QUICK as OBJECTIVE;

/// summary.json without its measured run times.
fn summary_without_times(dir: &Path) -> String {
    std::fs::read_to_string(dir.join("summary.json")).unwrap().lines().filter(|l| !l.contains("run_time")).collect::<Vec<_>>().join("\n")
}

#[test]
fn a_split_design_merges_to_the_unsplit_design() {
    let dir = sandbox("design");
    std::fs::write(dir.join("d.json"), OBJECTIVE).unwrap();
    let (code, _, err) = run(&dir, &["design", "d.json", "--out", "whole", "--quiet"]);
    assert_eq!(code, 0, "{err}");
    // The unsplit search stopped on agreement before its start limit, so the merge must stop where it
    // did, not take every start the parts ran.
    let summary: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(dir.join("whole/summary.json")).unwrap()).unwrap();
    let search = &summary["per_pulse_count"][0]["search"];
    assert_eq!(search["stopped_by"], "agreement", "{search}");
    assert!(search["starts"].as_u64().unwrap() < 4, "{search}");
    for n in [1usize, 2, 3, 5] {
        let mut parts = vec![];
        // Parts written in reverse order; with 5 parts of 4 starts one part owns none.
        for k in (0..n).rev() {
            let (shard, out) = (format!("{k}/{n}"), format!("parts{n}/{k}"));
            let (code, stdout, err) = run(&dir, &["design", "d.json", "--shard", &shard, "--out", &out, "--quiet"]);
            assert_eq!(code, 0, "part {shard}: {err}");
            assert!(stdout.contains(&format!("part {shard}:")), "{stdout}");
            parts.push(out);
        }
        let merged = format!("merged{n}");
        let mut args: Vec<&str> = vec!["merge"];
        args.extend(parts.iter().map(|s| s.as_str()));
        args.extend(["--out", &merged]);
        let (code, _, err) = run(&dir, &args);
        assert_eq!(code, 0, "merge of {n}: {err}");
        for f in ["design.json", "trace.csv", "history.csv", "design.svg", "convergence.svg"] {
            assert!(
                std::fs::read(dir.join("whole").join(f)).unwrap() == std::fs::read(dir.join(&merged).join(f)).unwrap(),
                "{f} differs after a split into {n}"
            );
        }
        assert_eq!(summary_without_times(&dir.join("whole")), summary_without_times(&dir.join(&merged)), "summary.json, {n} parts");
    }
    // A missing part is named with the command that reruns it, and nothing is written; run as printed,
    // the merge succeeds.
    std::fs::remove_dir_all(dir.join("parts3/1")).unwrap();
    let (code, _, err) = run(&dir, &["merge", "parts3/0", "parts3/2", "--out", "m"]);
    assert_eq!(code, 2, "{err}");
    assert!(!dir.join("m").exists());
    let rerun = err.split("rerun: ").nth(1).expect("a rerun command").lines().next().unwrap().to_string();
    assert!(rerun.contains("--shard 1/3"), "{rerun}");
    let words: Vec<&str> = rerun.split_whitespace().skip(1).collect();
    let (code, _, err) = run(&dir, &words);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = run(&dir, &["merge", "parts3/0", "parts3/1", "parts3/2", "--out", "m"]);
    assert_eq!(code, 0, "{err}");
    assert!(std::fs::read(dir.join("whole/design.json")).unwrap() == std::fs::read(dir.join("m/design.json")).unwrap());
    // Objectives whose counts depend on each other, time limits, and parts without a folder are refused.
    let variable = OBJECTIVE.replace("\"count\": 2", "\"max_count\": 2");
    std::fs::write(dir.join("v.json"), variable).unwrap();
    for (args, field) in [
        (vec!["design", "v.json", "--shard", "0/2", "--out", "v"], "pulses.max_count"),
        (vec!["design", "d.json", "--shard", "0/2", "--time-limit", "60", "--out", "v"], "search.time_limit_s"),
        (vec!["design", "d.json", "--shard", "0/2"], "--out"),
        (vec!["design", "d.json", "--shard", "2/2", "--out", "v"], "--shard"),
    ] {
        let (code, _, err) = run(&dir, &args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(err.starts_with(&format!("error: {field}")) && err.lines().count() == 1, "{err}");
        assert!(!dir.join("v").exists());
    }
    std::fs::remove_dir_all(&dir).ok();
}
