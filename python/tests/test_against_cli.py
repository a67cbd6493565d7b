"""Every entry point of the Python module against the command line's output for the same input.

The module and the command are built from one crate, so the numbers must agree exactly: summaries as
parsed JSON (shortest round-trip digits, so equal floats are equal bits), traces against the CLI's
trace.csv formatted the same way, written folders byte for byte (but for measured run times). The
command is found at $KICKTRAIN_BIN (default: target/ci/kicktrain of this checkout, else target/release/kicktrain).
"""

import json
import os
import pathlib
import signal
import subprocess
import threading
import time
import warnings

import numpy as np
import pytest

import kicktrain as kt

ROOT = pathlib.Path(__file__).resolve().parents[2]
BIN = os.environ.get("KICKTRAIN_BIN") or next(
    (str(p) for p in [ROOT / "target" / "ci" / "kicktrain", ROOT / "target" / "release" / "kicktrain"] if p.is_file()), "kicktrain"
)

SCENARIO = {
    "molecule": "N2",
    "temperature_k": 300,
    "pulses": [{"center_ps": 0, "fwhm_fs": 50, "peak_intensity_wcm2": 5e13}],
    "window": {"start_ps": 0.2, "stop_ps": 12, "step_fs": 20},
}

# Two 50 fs pulses on N2 at 300 K, quick search: about two seconds.
OBJECTIVE = {
    "molecule": "N2",
    "temperature_k": 300,
    "pulses": {"count": 2, "shape": "gaussian", "fwhm_fs": 50, "delay_ps": {"min": 0.2, "max": 9.0}, "peak_intensity_wcm2": {"min": 0, "max": 5e13}},
    "max_peak_intensity_wcm2": 5e13,
    "min_separation_ps": 0.2,
    "goal": {"kind": "peak", "observable": "cos2", "window_ps": [0.05, 9.0], "step_fs": 20},
    "search": {"seed": 3, "effort": "quick"},
}


def cli(*args, cwd=None, check=True):
    p = subprocess.run([BIN, *map(str, args)], cwd=cwd, capture_output=True, text=True)
    if check:
        assert p.returncode == 0, p.stderr
    return p


def without_times(summary):
    return {k: v for k, v in summary.items() if k != "run_time_s"}


def csv_text(trace):
    """trace.csv as the command writes it: time with 6 decimals, the rest with 10."""
    names = trace.names
    lines = [",".join(names)]
    for i in range(len(trace.t_ps)):
        lines.append(",".join(("%.6f" if k == 0 else "%.10f") % trace[n][i] for k, n in enumerate(names)))
    return "\n".join(lines) + "\n"


def test_simulate_equals_the_command(tmp_path):
    path = tmp_path / "s.json"
    path.write_text(json.dumps(SCENARIO))
    sim = kt.simulate(SCENARIO)
    out = json.loads(cli("simulate", path, "--json").stdout)
    assert without_times(sim.summary) == without_times(out)
    assert sim.summary["laser_safety"] == kt.LASER_SAFETY
    cli("simulate", path, "--out", tmp_path / "cli")
    assert csv_text(sim.trace) == (tmp_path / "cli" / "trace.csv").read_text()
    assert sim.t_ps.dtype == np.float64 and sim["cos2"].shape == sim.t_ps.shape
    # A path gives the same numbers as the dict; write() gives the command's files.
    again = kt.simulate(path)
    assert np.array_equal(again["cos2"], sim["cos2"])
    sim.write(tmp_path / "py")
    for f in ["trace.csv", "alignment.svg"]:
        assert (tmp_path / "py" / f).read_bytes() == (tmp_path / "cli" / f).read_bytes(), f
    assert without_times(json.loads((tmp_path / "py" / "summary.json").read_text())) == without_times(json.loads((tmp_path / "cli" / "summary.json").read_text()))


def test_design_equals_the_command(tmp_path):
    path = tmp_path / "d.json"
    path.write_text(json.dumps(OBJECTIVE))
    calls = []
    best = kt.design(OBJECTIVE, progress=lambda *a: calls.append(a))
    assert not best.interrupted
    assert calls and all(len(c) == 4 and isinstance(c[0], str) for c in calls)
    cli("design", path, "--out", tmp_path / "cli", "--quiet")
    assert best.scenario == json.loads((tmp_path / "cli" / "design.json").read_text())
    cli_summary = json.loads((tmp_path / "cli" / "summary.json").read_text())
    assert without_times(best.summary) == without_times(cli_summary)
    assert best.score == cli_summary["score"] and 0.4 < best.score < 1.0
    assert csv_text(best.trace) == (tmp_path / "cli" / "trace.csv").read_text()
    assert "baseline_cos2" in best.trace
    best.write(tmp_path / "py")
    for f in ["design.json", "trace.csv", "design.svg", "history.csv", "convergence.svg"]:
        assert (tmp_path / "py" / f).read_bytes() == (tmp_path / "cli" / f).read_bytes(), f
    # The design replays through simulate to its score (the replay's own check).
    assert best.summary["replay_score"] == pytest.approx(best.score, abs=1e-9)
    # --seed and --effort as keywords: the same design as the command with the options.
    other = kt.design(path, seed=5, effort="quick")
    out = json.loads(cli("design", path, "--seed", "5", "--effort", "quick", "--json", "--quiet").stdout)
    # (--json without --out prints the summary without the replay's score.)
    assert without_times({k: v for k, v in other.summary.items() if k != "replay_score"}) == without_times(out)


def test_pendular_focus_and_molecules_equal_the_command():
    got = kt.pendular("OCS", intensity_wcm2=1e12, static_kv_cm=20, temperature_k=1)
    out = json.loads(cli("pendular", "OCS", "--intensity-wcm2", "1e12", "--static-kv-cm", "20", "--temperature-k", "1", "--json").stdout)
    assert got == out and got["laser_safety"] == kt.LASER_SAFETY
    got = kt.focus(energy_mj=2, fwhm_fs=40, waist_um=30)
    assert got == json.loads(cli("focus", "--energy-mj", "2", "--fwhm-fs", "40", "--waist-um", "30", "--json").stdout)
    assert "laser_safety" in got
    assert kt.molecules() == json.loads(cli("molecules", "--json").stdout)


@pytest.mark.parametrize(
    "change, call",
    [
        (lambda s: s["pulses"][0].update(fwhm_fs=-5), "simulate"),
        (lambda s: s["pulses"][0].update(fwhm=50), "simulate"),
        (lambda s: s.update(temperature_k="warm"), "simulate"),
        (lambda s: s.update(molecule="XYZ"), "simulate"),
    ],
)
def test_bad_scenarios_raise_the_commands_message(tmp_path, change, call):
    bad = json.loads(json.dumps(SCENARIO))
    change(bad)
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(bad))
    p = cli("simulate", path, check=False)
    assert p.returncode == 2 and p.stderr.startswith("error: ")
    expected = p.stderr[len("error: ") :].strip()
    with pytest.raises(ValueError) as e:
        kt.simulate(path)
    assert str(e.value) == expected
    # From a dict the message names the same field (the file name differs only where JSON syntax is wrong).
    with pytest.raises(ValueError) as e:
        kt.simulate(bad)
    assert str(e.value).split(":")[0] == expected.split(":")[0]


def test_bad_keywords_and_files_raise_the_commands_message(tmp_path):
    path = tmp_path / "d.json"
    path.write_text(json.dumps(OBJECTIVE))
    p = cli("design", path, "--effort", "fast", check=False)
    with pytest.raises(ValueError) as e:
        kt.design(path, effort="fast")
    assert str(e.value) == p.stderr[len("error: ") :].strip()
    p = cli("simulate", tmp_path / "missing.json", check=False)
    with pytest.raises(ValueError) as e:
        kt.simulate(tmp_path / "missing.json")
    assert str(e.value) == p.stderr[len("error: ") :].strip()
    p = cli("pendular", "XYZ", check=False)
    with pytest.raises(ValueError) as e:
        kt.pendular("XYZ")
    assert str(e.value) == p.stderr[len("error: ") :].strip()
    p = cli("focus", "--energy-mj", "-1", "--fwhm-fs", "40", "--waist-um", "30", check=False)
    with pytest.raises(ValueError) as e:
        kt.focus(energy_mj=-1, fwhm_fs=40, waist_um=30)
    assert str(e.value) == p.stderr[len("error: ") :].strip()
    with pytest.raises(ValueError, match="finite"):
        kt.simulate(dict(SCENARIO, temperature_k=float("nan")))
    with pytest.raises(TypeError):
        kt.simulate(42)


# Four pulses at normal effort: a search of many seconds, long enough to interrupt.
SLOW = dict(OBJECTIVE, pulses=dict(OBJECTIVE["pulses"], count=4), search={"seed": 1, "effort": "normal"})


def test_ctrl_c_returns_the_best_design_so_far_and_restores_the_handler():
    seen = []
    timer = threading.Timer(1.5, lambda: os.kill(os.getpid(), signal.SIGINT))
    t0 = time.monotonic()
    timer.start()
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always")
        best = kt.design(SLOW, progress=lambda *a: seen.append(a))
    elapsed = time.monotonic() - t0
    assert best.interrupted and any(issubclass(x.category, RuntimeWarning) for x in w)
    assert 0.0 < best.score < 1.0 and best.summary["interrupted"] is True
    assert elapsed < 20, elapsed
    # Python's own handler is back: the next Ctrl-C is a KeyboardInterrupt again.
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler
    with pytest.raises(KeyboardInterrupt):
        os.kill(os.getpid(), signal.SIGINT)
        time.sleep(1)


def test_an_exception_in_the_progress_callback_stops_the_search():
    class Stop(Exception):
        pass

    def progress(stage, done, planned, best):
        raise Stop(stage)

    t0 = time.monotonic()
    with pytest.raises(Stop):
        kt.design(SLOW, progress=progress)
    assert time.monotonic() - t0 < 20


def test_long_calls_release_the_gil():
    ticks = []
    stop = threading.Event()

    def tick():
        while not stop.is_set():
            ticks.append(1)
            time.sleep(0.001)

    t = threading.Thread(target=tick)
    t.start()
    try:
        kt.design(OBJECTIVE)
    finally:
        stop.set()
        t.join()
    assert len(ticks) > 50
