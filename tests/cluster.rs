//! A scan and a design split by `kicktrain cluster` into a real Slurm job array, merged by the dependent
//! job, equal the unsplit runs byte for byte. Needs a running Slurm cluster (tools/slurm/start.sh starts a one-node
//! one); run with `cargo test --profile ci --test cluster -- --ignored` (`.ci/run` does). Without a cluster
//! the test fails, saying so, rather than passing.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_kicktrain");

const SCENARIO: &str = r#"{"molecule": "N2", "temperature_k": 300,
 "pulses": [{"center_ps": 0, "fwhm_fs": 50, "peak_intensity_wcm2": 3e13}, {"center_ps": 3, "fwhm_fs": 50, "peak_intensity_wcm2": 3e13}],
 "window": {"start_ps": 3.2, "stop_ps": 12, "step_fs": 50}, "solver": {"method": "kick"}}"#;

fn output(dir: &Path, program: &str, args: &[&str]) -> (bool, String, String) {
    match Command::new(program).args(args).current_dir(dir).output() {
        Ok(o) => (o.status.success(), String::from_utf8_lossy(&o.stdout).into_owned(), String::from_utf8_lossy(&o.stderr).into_owned()),
        Err(e) => (false, String::new(), format!("cannot run {program}: {e}")),
    }
}

/// A fresh folder, after checking that a Slurm cluster answers.
fn cluster_sandbox(tag: &str) -> PathBuf {
    let (ok, info, err) = output(Path::new("."), "sinfo", &["-h", "-o", "%T"]);
    assert!(
        ok && info.lines().any(|l| ["idle", "mixed", "allocated"].contains(&l.trim())),
        "no Slurm cluster answers (sinfo: {info}{err}); start one with tools/slurm/start.sh"
    );
    let nanos = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_nanos()).unwrap_or(0);
    let dir: PathBuf = std::env::temp_dir().join(format!("kicktrain-cluster-{tag}-{}-{nanos}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// Submit run/array.sbatch and run/merge.sbatch as the printed commands do, and wait for `result`.
fn submit_and_wait(dir: &Path, result: &Path, tasks: usize) {
    let (ok, jid, err) = output(dir, "sbatch", &["--parsable", "run/array.sbatch"]);
    assert!(ok, "sbatch of the array: {err}");
    let jid = jid.trim().split(';').next().unwrap().to_string();
    let (ok, _, err) = output(dir, "sbatch", &["--parsable", &format!("--dependency=afterok:{jid}"), "run/merge.sbatch"]);
    assert!(ok, "sbatch of the merge: {err}");
    let t0 = Instant::now();
    while !result.is_file() {
        assert!(t0.elapsed() < Duration::from_secs(180), "the array and merge jobs did not finish in 3 minutes; logs in {}", dir.join("run/logs").display());
        std::thread::sleep(Duration::from_millis(500));
    }
    for k in 0..tasks {
        assert!(dir.join(format!("run/parts/{k}/part.json")).is_file(), "part {k}");
    }
}

#[test]
#[ignore = "needs a running Slurm cluster: bash tools/slurm/start.sh, then --ignored"]
fn a_scan_run_as_a_slurm_job_array_merges_to_the_unsplit_run() {
    let dir = cluster_sandbox("scan");
    std::fs::write(dir.join("s.json"), SCENARIO).unwrap();
    let axes = [
        "s.json",
        "--x",
        "pulses[1].center_ps",
        "--from",
        "1",
        "--to",
        "4",
        "--steps",
        "9",
        "--y",
        "pulses[1].peak_intensity_wcm2",
        "--y-from",
        "0",
        "--y-to",
        "4e13",
        "--y-steps",
        "6",
    ];
    let mut whole = vec!["scan"];
    whole.extend(axes);
    whole.extend(["--out", "whole", "--quiet"]);
    let (ok, _, err) = output(&dir, BIN, &whole);
    assert!(ok, "{err}");
    let mut cluster = vec!["cluster", "scan"];
    cluster.extend(axes);
    cluster.extend(["--shards", "4", "--cpus-per-task", "1", "--out", "run"]);
    let (ok, printed, err) = output(&dir, BIN, &cluster);
    assert!(ok, "{err}");
    assert!(printed.contains("sbatch --parsable run/array.sbatch") && printed.contains("--dependency=afterok:"), "{printed}");
    let array = std::fs::read_to_string(dir.join("run/array.sbatch")).unwrap();
    assert!(array.contains("#SBATCH --array=0-3") && array.contains("#SBATCH --time=") && array.contains("#SBATCH --mem="), "{array}");
    let merged = dir.join("run/result/scan.csv");
    submit_and_wait(&dir, &merged, 4);
    assert_eq!(std::fs::read(&merged).unwrap(), std::fs::read(dir.join("whole/scan.csv")).unwrap(), "the merged scan.csv differs from the unsplit run's");
    let _ = std::fs::remove_dir_all(&dir);
}

#[path = "common/objectives.rs"]
mod objectives;
use objectives::TWO_PULSES_QUICK as OBJECTIVE;

#[test]
#[ignore = "needs a running Slurm cluster: bash tools/slurm/start.sh, then --ignored"]
fn a_design_run_as_a_slurm_job_array_finishes_to_the_unsplit_design() {
    let dir = cluster_sandbox("design");
    std::fs::write(dir.join("d.json"), OBJECTIVE).unwrap();
    let (ok, _, err) = output(&dir, BIN, &["design", "d.json", "--out", "whole", "--quiet"]);
    assert!(ok, "{err}");
    let (ok, printed, err) = output(&dir, BIN, &["cluster", "design", "d.json", "--shards", "3", "--cpus-per-task", "1", "--out", "run"]);
    assert!(ok, "{err}");
    assert!(printed.contains("4 starts in 3 parts"), "{printed}");
    let merged = dir.join("run/result/design.json");
    submit_and_wait(&dir, &merged, 3);
    for f in ["design.json", "trace.csv", "history.csv"] {
        assert!(
            std::fs::read(dir.join("run/result").join(f)).unwrap() == std::fs::read(dir.join("whole").join(f)).unwrap(),
            "the merged {f} differs from the unsplit run's"
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
}
