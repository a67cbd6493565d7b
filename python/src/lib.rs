//! The native half of the `kicktrain` Python package: thin bindings over the kicktrain library (no
//! second implementation). Inputs arrive as JSON text or a file path and go through the library's own
//! validation, so a bad input raises `ValueError` with the message the command line prints after
//! "error: ". Results leave as JSON text, which the Python half turns into dicts and numpy arrays: JSON
//! keeps every f64 exactly (shortest round-trip digits out, correctly rounded parsing in).
//!
//! Long calls (`simulate`, `design`) release the GIL and run on rayon's threads as the command line does.
//! During `design`, SIGINT (Ctrl-C, a notebook's interrupt) is caught here: the search ends at its next
//! iteration and the best design so far is returned, marked interrupted; Python's own handler is put back
//! when the call returns.

use kicktrain::design::Objective;
use kicktrain::design::search::{DesignResult, Monitor, StageCounter};
use kicktrain::error::Error;
use kicktrain::report;
use kicktrain::report::output::OutputDir;
use kicktrain::scenario::Scenario;
use pyo3::exceptions::{PyArithmeticError, PyKeyboardInterrupt, PyOSError, PyValueError};
use pyo3::prelude::*;
use std::path::Path;
use std::sync::Mutex;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

/// The library's error as the Python exception a caller expects, with the command line's message.
fn py_err(e: Error) -> PyErr {
    let text = e.to_string();
    match e {
        Error::Input { .. } => PyValueError::new_err(text),
        Error::Io(_) => PyOSError::new_err(text),
        Error::Numerical(_) => PyArithmeticError::new_err(text),
        Error::Interrupted => PyKeyboardInterrupt::new_err(text),
    }
}

/// An input's text and the name its errors carry: the file at `path`, or `text` (a dict the Python half
/// serialized) named `what`.
fn input_text(text: Option<String>, path: Option<String>, what: &str) -> Result<(String, String), Error> {
    match (text, path) {
        (_, Some(p)) => Ok((kicktrain::input::read_text_file(Path::new(&p))?, p)),
        (Some(t), None) => Ok((t, format!("{what} (dict)"))),
        (None, None) => Err(Error::input(what, "expected a dict or the path of a JSON file")),
    }
}

/// JSON text of the columns of a trace: a list of [name, values] pairs in the CSV's order.
fn columns_json(columns: &[(&str, &[f64])]) -> String {
    let pairs: Vec<serde_json::Value> = columns.iter().map(|(n, v)| serde_json::json!([n, v])).collect();
    serde_json::Value::Array(pairs).to_string()
}

/// A finished simulation (`kicktrain simulate`).
#[pyclass(module = "kicktrain._native", frozen)]
struct Simulation {
    sim: kicktrain::simulate::Simulation,
}

#[pymethods]
impl Simulation {
    /// summary.json of the run, as JSON text.
    fn summary_json(&self) -> String {
        report::simulation_summary(&self.sim).to_string()
    }

    /// The trace.csv columns, as JSON text.
    fn columns_json(&self) -> String {
        columns_json(&report::simulation_columns(&self.sim))
    }

    /// Write summary.json, trace.csv and alignment.svg into the folder `dir` (as `--out` does).
    fn write(&self, py: Python<'_>, dir: String) -> PyResult<()> {
        py.detach(|| -> Result<(), Error> {
            let staged = OutputDir::prepare(Path::new(&dir), "simulate")?;
            report::write_simulation(&self.sim, staged.path())?;
            staged.commit()
        })
        .map_err(py_err)
    }
}

/// Run a scenario (JSON text or a file path), as `kicktrain simulate` does.
#[pyfunction]
#[pyo3(signature = (text=None, path=None, allow_long=false))]
fn simulate(py: Python<'_>, text: Option<String>, path: Option<String>, allow_long: bool) -> PyResult<Simulation> {
    py.detach(|| -> Result<Simulation, Error> {
        let (text, name) = input_text(text, path, "scenario")?;
        let mut scenario = Scenario::from_json_str(&text, &name)?;
        if allow_long {
            scenario.solver.lift_size_limits();
        }
        let sim = kicktrain::design::score::simulate_scored(&scenario, Default::default())?;
        Ok(Simulation { sim })
    })
    .map_err(py_err)
}

/// A finished design (`kicktrain design`) with its replay.
#[pyclass(module = "kicktrain._native", frozen)]
struct Design {
    obj: Objective,
    result: DesignResult,
    replay: kicktrain::design::score::Replay,
}

#[pymethods]
impl Design {
    /// summary.json of the design, as JSON text.
    fn summary_json(&self) -> String {
        report::design::replayed_summary(&self.obj, &self.result, &self.replay).to_string()
    }

    /// design.json (the best train as a scenario file), as JSON text.
    fn scenario_json(&self) -> String {
        report::design::design_file(&self.replay).to_string()
    }

    /// The trace.csv columns (the design's trace, then the single-pulse baseline's), as JSON text.
    fn columns_json(&self) -> String {
        columns_json(&report::design::design_columns(&self.replay))
    }

    /// True when the search was interrupted (the design is the best found so far).
    #[getter]
    fn interrupted(&self) -> bool {
        self.result.interrupted
    }

    /// Write design.json, summary.json, trace.csv, design.svg, history.csv and convergence.svg into
    /// the folder `dir` (as `--out` does).
    fn write(&self, py: Python<'_>, dir: String) -> PyResult<()> {
        py.detach(|| -> Result<(), Error> {
            let staged = OutputDir::prepare(Path::new(&dir), "design")?;
            report::design::write_design(&self.obj, &self.result, &self.replay, staged.path())?;
            staged.commit()
        })
        .map_err(py_err)
    }
}

/// Set by the SIGINT handler installed during a design.
static STOP: AtomicBool = AtomicBool::new(false);

#[cfg(unix)]
extern "C" fn on_sigint(_: libc::c_int) {
    STOP.store(true, Ordering::SeqCst);
}

/// While alive, SIGINT sets [`STOP`] instead of reaching Python's handler; dropping it restores the
/// handler that was there before.
struct CatchInterrupt {
    #[cfg(unix)]
    previous: libc::sigaction,
}

impl CatchInterrupt {
    fn install() -> CatchInterrupt {
        STOP.store(false, Ordering::SeqCst);
        #[cfg(unix)]
        {
            // SAFETY: sigaction with a handler that only stores to an atomic (async-signal-safe); the
            // previous action is kept and restored on drop.
            unsafe {
                let mut action: libc::sigaction = std::mem::zeroed();
                action.sa_sigaction = on_sigint as *const () as usize;
                libc::sigemptyset(&mut action.sa_mask);
                let mut previous: libc::sigaction = std::mem::zeroed();
                libc::sigaction(libc::SIGINT, &action, &mut previous);
                CatchInterrupt { previous }
            }
        }
        #[cfg(not(unix))]
        CatchInterrupt {}
    }
}

impl Drop for CatchInterrupt {
    fn drop(&mut self) {
        #[cfg(unix)]
        // SAFETY: puts back the action saved by `install`.
        unsafe {
            libc::sigaction(libc::SIGINT, &self.previous, std::ptr::null_mut());
        }
    }
}

/// Reports a search's progress to a Python callable `progress(stage, done, planned, best)` (at most five
/// times a second, and at every new stage) and reads the interrupt flag. An exception in the callable
/// stops the search and is raised when it returns.
struct PyMonitor {
    progress: Option<Py<PyAny>>,
    /// (stage name, planned evaluations).
    stage: Mutex<(String, usize)>,
    counter: StageCounter,
    last_call: Mutex<Option<Instant>>,
    error: Mutex<Option<PyErr>>,
}

impl PyMonitor {
    fn call(&self, done: usize, best: Option<f64>, force: bool) {
        let Some(cb) = &self.progress else { return };
        {
            let mut last = self.last_call.lock().expect("lock");
            if !force && last.is_some_and(|t| t.elapsed() < Duration::from_millis(200)) {
                return;
            }
            *last = Some(Instant::now());
        }
        let (name, planned) = {
            let s = self.stage.lock().expect("lock");
            (s.0.clone(), s.1)
        };
        let outcome = Python::attach(|py| cb.call1(py, (name, done, planned, best)).map(|_| ()));
        if let Err(e) = outcome {
            *self.error.lock().expect("lock") = Some(e);
            STOP.store(true, Ordering::SeqCst);
        }
    }
}

impl Monitor for PyMonitor {
    fn stage(&self, name: &str, planned: usize) {
        self.counter.restart();
        *self.stage.lock().expect("lock") = (name.to_string(), planned);
        self.call(0, None, true);
    }
    fn evaluated(&self, evaluations: usize, best: Option<f64>) {
        if self.progress.is_some() {
            self.call(self.counter.done(evaluations), best, false);
        }
    }
    fn interrupted(&self) -> bool {
        STOP.load(Ordering::Relaxed)
    }
}

/// Search the objective (JSON text or a file path), as `kicktrain design` does, with the command line's
/// --seed, --effort and --time-limit as keywords.
#[pyfunction]
#[pyo3(signature = (text=None, path=None, seed=None, effort=None, time_limit_s=None, progress=None))]
fn design(
    py: Python<'_>,
    text: Option<String>,
    path: Option<String>,
    seed: Option<u64>,
    effort: Option<String>,
    time_limit_s: Option<f64>,
    progress: Option<Py<PyAny>>,
) -> PyResult<Design> {
    let monitor =
        PyMonitor { progress, stage: Mutex::new((String::new(), 0)), counter: StageCounter::default(), last_call: Mutex::new(None), error: Mutex::new(None) };
    let guard = CatchInterrupt::install();
    let outcome = py.detach(|| -> Result<Design, Error> {
        let (text, name) = input_text(text, path, "objective")?;
        let mut obj = Objective::from_json_str(&text, &name)?;
        obj.override_search(seed, effort.as_deref(), time_limit_s)?;
        let result = kicktrain::design::search::design(&obj, &monitor)?;
        let replay = kicktrain::design::score::replay(&obj, &result)?;
        Ok(Design { obj, result, replay })
    });
    drop(guard);
    if let Some(e) = monitor.error.lock().expect("lock").take() {
        return Err(e);
    }
    outcome.map_err(py_err)
}

/// The dressed-state listing of `kicktrain pendular --json`, as JSON text.
#[pyfunction]
#[pyo3(signature = (molecule, intensity_wcm2=0.0, static_kv_cm=0.0, temperature_k=1.0, static_angle_deg=0.0, j_max=3))]
fn pendular(
    py: Python<'_>,
    molecule: String,
    intensity_wcm2: f64,
    static_kv_cm: f64,
    temperature_k: f64,
    static_angle_deg: f64,
    j_max: u32,
) -> PyResult<String> {
    py.detach(|| -> Result<String, Error> {
        let (mol, r) = kicktrain::pendular::listing(&molecule, intensity_wcm2, static_kv_cm, static_angle_deg, temperature_k, j_max)?;
        Ok(report::text::pendular_json(&mol.name, intensity_wcm2, static_kv_cm, temperature_k, &r).to_string())
    })
    .map_err(py_err)
}

/// Peak intensity and fluence from pulse energy and focusing, as `kicktrain focus --json` gives them
/// (JSON text).
#[pyfunction]
#[pyo3(signature = (energy_mj, fwhm_fs, shape="gaussian".to_string(), waist_um=None, beam_radius_mm=None, wavelength_nm=None, focal_length_mm=None, m2=1.0, molecule=None))]
#[allow(clippy::too_many_arguments)]
fn focus(
    energy_mj: f64,
    fwhm_fs: f64,
    shape: String,
    waist_um: Option<f64>,
    beam_radius_mm: Option<f64>,
    wavelength_nm: Option<f64>,
    focal_length_mm: Option<f64>,
    m2: f64,
    molecule: Option<String>,
) -> PyResult<String> {
    let f = kicktrain::optics::Focus { energy_mj, waist_um, beam_radius_mm, wavelength_nm, focal_length_mm, m2 };
    let r = kicktrain::optics::focus_report(&f, fwhm_fs, &shape, molecule.as_deref()).map_err(py_err)?;
    Ok(report::text::focus_json(&r).to_string())
}

/// The molecule library with constants and sources (`kicktrain molecules --json`), as JSON text.
#[pyfunction]
fn molecules() -> String {
    report::text::molecules_json().to_string()
}

/// The native module.
#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("LASER_SAFETY", report::LASER_SAFETY)?;
    m.add("VERSION", env!("CARGO_PKG_VERSION"))?;
    m.add_class::<Simulation>()?;
    m.add_class::<Design>()?;
    m.add_function(wrap_pyfunction!(simulate, m)?)?;
    m.add_function(wrap_pyfunction!(design, m)?)?;
    m.add_function(wrap_pyfunction!(pendular, m)?)?;
    m.add_function(wrap_pyfunction!(focus, m)?)?;
    m.add_function(wrap_pyfunction!(molecules, m)?)?;
    Ok(())
}
