//! kicktrain command line: a thin front end over the library (parse, load, call, report).

use clap::{Parser, Subcommand};
use kicktrain::design::Objective;
use kicktrain::design::search::{Monitor, design};
use kicktrain::error::Error;
use kicktrain::report;
use kicktrain::report::output::OutputDir;
use kicktrain::scenario::Scenario;
use kicktrain::simulate::simulate;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

#[derive(Parser)]
#[command(
    name = "kicktrain",
    version,
    about = "Design and simulate laser pulse trains that align gas-phase molecules.",
    after_help = "Examples:\n  kicktrain molecules\n  kicktrain simulate examples/scenarios/nitrogen-one-pulse.json --out run1\n  kicktrain design --out best\n  kicktrain pendular OCS --intensity-wcm2 1e12 --static-kv-cm 20\n\n\
Exit codes: 0 done; 1 numerical limit (the run could not reach its accuracy); 2 bad input (one line naming the field);\n\
3 output could not be read or written; 4 stopped by SIGINT/SIGTERM, result so far written and marked partial\n\
(design, scan, tolerance); 130 stopped before anything could be written. --out folders appear whole or not at all.\n\n\
Lasers that align molecules are class 4: follow your laser safety officer and IEC 60825-1 / ANSI Z136.1."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
    /// Go on with runs whose estimated number of finite-pulse time steps exceeds solver.max_steps.
    #[arg(long, global = true)]
    allow_long: bool,
}

/// Set from --allow-long: lift every scenario's solver.max_steps.
static ALLOW_LONG: AtomicBool = AtomicBool::new(false);

/// Read a scenario file; --allow-long lifts its step limit.
fn read_scenario(path: &Path) -> Result<Scenario, Error> {
    let text = read_text(path)?;
    let mut scenario = Scenario::from_json_str(&text, &path.display().to_string())?;
    if ALLOW_LONG.load(Ordering::SeqCst) {
        scenario.solver.max_steps = f64::INFINITY;
        scenario.solver.max_states = Some(f64::INFINITY);
    }
    Ok(scenario)
}

#[derive(Subcommand)]
enum Command {
    /// List the built-in molecules with their constants and sources.
    #[command(after_help = "Example:\n  kicktrain molecules\n  kicktrain molecules --json > molecules.json")]
    Molecules {
        /// Print the table as JSON (with every source).
        #[arg(long)]
        json: bool,
    },
    /// Search pulse timings and intensities for the best field-free alignment under the ceilings.
    #[command(after_help = "Examples:\n  kicktrain design                      # built-in example (two pulses, N2 at 300 K)\n  \
kicktrain design objectives/two-pulse-room-temperature.json --out best\n  \
kicktrain simulate best/design.json --out check   # replays the design\n\n\
--out DIR writes design.json, summary.json, trace.csv, design.svg, history.csv and convergence.svg.\n\
The search runs independent starts until three agree (see summary.json search.confidence) and warns when\n\
they do not; --effort thorough searches harder, --time-limit S bounds the time.\n\
Ctrl-C or SIGTERM stops the search and still reports (and writes) the best design found so far, exit code 4;\n\
a second signal quits at once (exit 130) and writes nothing.")]
    Design {
        /// Objective file (JSON); the built-in two-pulse example when omitted.
        objective: Option<PathBuf>,
        /// Output folder.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Seed for the search (overrides the file's search.seed).
        #[arg(long)]
        seed: Option<u64>,
        /// Effort: quick, normal or thorough (overrides the file's search.effort).
        #[arg(long)]
        effort: Option<String>,
        /// No new independent start after this many seconds (overrides search.time_limit_s).
        #[arg(long, value_name = "S")]
        time_limit: Option<f64>,
        /// No progress bar.
        #[arg(long)]
        quiet: bool,
        /// Print the summary as JSON to standard output.
        #[arg(long)]
        json: bool,
    },
    /// Field-dressed (pendular) states in a constant laser intensity and static field: the adiabatic limit.
    #[command(allow_negative_numbers = true)]
    #[command(after_help = "Example:\n  kicktrain pendular OCS --intensity-wcm2 1e12 --static-kv-cm 20 --temperature-k 1\n\n\
Energies exclude the isotropic shift −¼α⊥E0², common to all states.")]
    Pendular {
        /// Library molecule name.
        molecule: String,
        /// Cycle-averaged laser intensity, W/cm².
        #[arg(long, default_value_t = 0.0)]
        intensity_wcm2: f64,
        /// Static field along the laser polarization, kV/cm.
        #[arg(long, default_value_t = 0.0)]
        static_kv_cm: f64,
        /// Temperature for the thermal adiabatic averages, K.
        #[arg(long, default_value_t = 1.0)]
        temperature_k: f64,
        /// List states connecting to field-free J up to this value.
        #[arg(long, default_value_t = 3)]
        j_max: u32,
        /// Print JSON instead of a table.
        #[arg(long)]
        json: bool,
    },
    /// Convert pulse energy, duration and focusing to peak power, waist, Rayleigh range and intensity.
    #[command(allow_negative_numbers = true)]
    #[command(after_help = "Examples:\n  kicktrain focus --energy-mj 2 --fwhm-fs 40 --waist-um 30\n  \
kicktrain focus --energy-mj 2 --fwhm-fs 40 --beam-radius-mm 5 --wavelength-nm 800 --focal-length-mm 300 --m2 1.2\n\n\
Gaussian beam: I0 = 2P/(πw0²), w0 = M²λf/(πw_in); peak power from the envelope area (0.9394 E/τ for Gaussian pulses).")]
    Focus {
        /// Pulse energy, mJ.
        #[arg(long)]
        energy_mj: f64,
        /// Intensity FWHM, fs.
        #[arg(long)]
        fwhm_fs: f64,
        /// Temporal shape: gaussian, sech2 or flat_top.
        #[arg(long, default_value = "gaussian")]
        shape: String,
        /// 1/e² intensity radius at the focus, µm.
        #[arg(long)]
        waist_um: Option<f64>,
        /// 1/e² intensity radius of the collimated beam on the lens, mm.
        #[arg(long)]
        beam_radius_mm: Option<f64>,
        /// Wavelength, nm.
        #[arg(long)]
        wavelength_nm: Option<f64>,
        /// Focal length, mm.
        #[arg(long)]
        focal_length_mm: Option<f64>,
        /// Beam quality factor M².
        #[arg(long, default_value_t = 1.0)]
        m2: f64,
        /// Compare the intensity with this library molecule's ionization estimate (default: every library molecule).
        #[arg(long)]
        molecule: Option<String>,
        /// Print the results as JSON (keys carry their units).
        #[arg(long)]
        json: bool,
    },
    /// Scan one or two numeric fields of a scenario (for example delay × intensity), in parallel.
    #[command(allow_negative_numbers = true)]
    #[command(
        after_help = "Examples:\n  kicktrain scan examples/scenarios/nitrogen-one-pulse.json --x pulses[0].peak_intensity_wcm2 --from 1e13 --to 8e13 --steps 15 --out scan1\n  \
kicktrain scan two-pulse.json --x pulses[1].center_ps --from 1 --to 9 --steps 40 --y pulses[1].peak_intensity_wcm2 --y-from 0 --y-to 5e13 --y-steps 40 --out scan2\n\n\
Reports the scenario's goal if it has one, else the peak ⟨cos²θ⟩ after the last pulse. Writes scan.csv and scan.svg (a line or a heatmap).\n\n\
Cost: every point is a whole run with the scenario's solver. With the default solver a 40 × 40 two-pulse scan of N2 at 300 K\n\
takes about a minute on two cores; with \"solver\": {\"method\": \"kick\"} (each pulse replaced by its impulsive kick) under a\n\
second. Use the kick model for first looks when every pulse is much shorter than the rotational period (about 100 fs or less\n\
for N2, whose period is 8.4 ps), then check the interesting region with the default solver."
    )]
    Scan {
        /// Scenario file (JSON).
        scenario: PathBuf,
        /// Path of the first scanned field, e.g. pulses[1].center_ps.
        #[arg(long)]
        x: String,
        /// First value of x.
        #[arg(long)]
        from: f64,
        /// Last value of x.
        #[arg(long)]
        to: f64,
        /// Number of x values.
        #[arg(long, default_value_t = 21)]
        steps: usize,
        /// Path of the second scanned field (2D scan).
        #[arg(long)]
        y: Option<String>,
        /// First value of y.
        #[arg(long)]
        y_from: Option<f64>,
        /// Last value of y.
        #[arg(long)]
        y_to: Option<f64>,
        /// Number of y values.
        #[arg(long, default_value_t = 21)]
        y_steps: usize,
        /// Output folder for scan.csv and scan.svg.
        #[arg(long)]
        out: Option<PathBuf>,
        /// No progress bar.
        #[arg(long)]
        quiet: bool,
    },
    /// Monte Carlo tolerance of a design (a scenario with a goal) to timing jitter and energy or phase noise.
    #[command(allow_negative_numbers = true)]
    #[command(after_help = "Example:\n  kicktrain tolerance best/design.json --jitter-fs 20 --energy-noise-percent 3 --samples 200 --out tol\n\n\
Jitter moves every pulse after the first; the probe stays at the nominal times. Writes tolerance.csv and tolerance.svg.")]
    Tolerance {
        /// Scenario with a goal (e.g. a design.json).
        scenario: PathBuf,
        /// RMS timing jitter of each pulse after the first, fs.
        #[arg(long, default_value_t = 0.0)]
        jitter_fs: f64,
        /// RMS pulse-energy noise, percent.
        #[arg(long, default_value_t = 0.0)]
        energy_noise_percent: f64,
        /// RMS two-colour phase noise, rad.
        #[arg(long, default_value_t = 0.0)]
        phase_noise_rad: f64,
        /// Number of Monte Carlo samples.
        #[arg(long, default_value_t = 200)]
        samples: usize,
        /// Seed of the random draws.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Output folder for tolerance.csv and tolerance.svg.
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Simulate one scenario file: alignment trace, summary and plot.
    #[command(after_help = "Example:\n  kicktrain simulate examples/scenarios/nitrogen-one-pulse.json --out run1\n\n\
The scenario is JSON: {\"molecule\": \"N2\", \"temperature_k\": 300,\n  \"pulses\": [{\"center_ps\": 0, \"fwhm_fs\": 50, \"peak_intensity_wcm2\": 5e13}],\n  \"window\": {\"start_ps\": 0.2, \"stop_ps\": 12, \"step_fs\": 20}}\n\
--out DIR writes summary.json, trace.csv (t_ps,cos2,cos2_2d, plus cos,cos3 with orienting fields) and alignment.svg.")]
    Simulate {
        /// Scenario file (JSON).
        scenario: PathBuf,
        /// Output folder for summary.json, trace.csv and alignment.svg.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Also print the summary as JSON to standard output.
        #[arg(long)]
        json: bool,
    },
}

fn main() -> ExitCode {
    // Like other Unix tools, stop quietly when the reader of stdout goes away (`kicktrain … | head`);
    // Rust ignores SIGPIPE by default, which turns the closed pipe into a panic in println!.
    #[cfg(unix)]
    // SAFETY: restoring the default disposition of one signal before any thread starts.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    let cli = Cli::parse();
    ALLOW_LONG.store(cli.allow_long, Ordering::SeqCst);
    install_signal_handler();
    let result = match cli.command {
        Command::Molecules { json } => molecules(json).map(|()| Finish::Done),
        Command::Simulate { scenario, out, json } => run_simulate(&scenario, out.as_deref(), json).map(|()| Finish::Done),
        Command::Pendular { molecule, intensity_wcm2, static_kv_cm, temperature_k, j_max, json } => {
            run_pendular(&molecule, intensity_wcm2, static_kv_cm, temperature_k, j_max, json).map(|()| Finish::Done)
        }
        Command::Focus { energy_mj, fwhm_fs, shape, waist_um, beam_radius_mm, wavelength_nm, focal_length_mm, m2, molecule, json } => run_focus(
            kicktrain::optics::Focus { energy_mj, waist_um, beam_radius_mm, wavelength_nm, focal_length_mm, m2 },
            fwhm_fs,
            &shape,
            molecule.as_deref(),
            json,
        )
        .map(|()| Finish::Done),
        Command::Scan { scenario, x, from, to, steps, y, y_from, y_to, y_steps, out, quiet } => {
            run_scan(&scenario, &x, from, to, steps, y.as_deref(), y_from, y_to, y_steps, out.as_deref(), quiet)
        }
        Command::Tolerance { scenario, jitter_fs, energy_noise_percent, phase_noise_rad, samples, seed, out } => run_tolerance(
            &scenario,
            kicktrain::tolerance::Noise { jitter_fs, energy_percent: energy_noise_percent, phase_rad: phase_noise_rad },
            samples,
            seed,
            out.as_deref(),
        ),
        Command::Design { objective, out, seed, effort, time_limit, quiet, json } => {
            run_design(objective.as_deref(), out.as_deref(), seed, effort.as_deref(), time_limit, quiet, json)
        }
    };
    match result {
        Ok(Finish::Done) => ExitCode::SUCCESS,
        Ok(Finish::Partial) => ExitCode::from(EXIT_PARTIAL),
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(match e {
                Error::Input { .. } => 2,
                Error::Numerical(_) => 1,
                Error::Io(_) => EXIT_IO,
                Error::Interrupted => EXIT_INTERRUPTED,
            })
        }
    }
}

/// Exit code: the output could not be written (nothing written).
const EXIT_IO: u8 = 3;
/// Exit code: stopped by a signal; the result so far was reported and written, marked partial.
const EXIT_PARTIAL: u8 = 4;
/// Exit code: stopped by a signal before anything could be reported; nothing written (128 + SIGINT).
const EXIT_INTERRUPTED: u8 = 130;

/// How a command ended.
enum Finish {
    /// Everything asked for was done.
    Done,
    /// Stopped by a signal; what was done is reported and written, marked partial.
    Partial,
}

/// Set by the first SIGINT or SIGTERM; the commands that can stop cleanly poll it.
static STOP: AtomicBool = AtomicBool::new(false);
/// True while the running command stops cleanly on a first signal (design, scan, tolerance).
static GRACEFUL: AtomicBool = AtomicBool::new(false);

/// SIGINT and SIGTERM (what a batch scheduler sends at its time limit): a command that can stop cleanly
/// finishes its current step and writes what it has; any other command, or a second signal, quits at
/// once and removes its unfinished output. A signal during the final renames of an output folder waits
/// for them, so a folder is always complete or absent.
fn install_signal_handler() {
    let _ = ctrlc::set_handler(|| {
        let second = STOP.swap(true, Ordering::SeqCst);
        if kicktrain::report::output::committing() {
            eprintln!("\nfinishing writing the output");
            return;
        }
        if second || !GRACEFUL.load(Ordering::SeqCst) {
            kicktrain::report::output::abandon_staging();
            eprintln!("\ninterrupted: nothing written");
            std::process::exit(EXIT_INTERRUPTED as i32);
        }
        eprintln!("\nstopping: finishing the current step and keeping what is done (a second signal quits at once, writing nothing)");
    });
}

/// Prepare the output folder before any work, so that an output that cannot be written fails at once.
fn prepare_out(out: Option<&Path>, command: &str) -> Result<Option<OutputDir>, Error> {
    out.map(|d| OutputDir::prepare(d, command)).transpose()
}

/// Largest input file read (scenarios and objectives are a few kB).
const MAX_INPUT_BYTES: u64 = 16 << 20;

/// Read an input file of at most [`MAX_INPUT_BYTES`] as UTF-8 text (never echoing its contents).
fn read_text(path: &Path) -> Result<String, Error> {
    use std::io::Read;
    let field = path.display().to_string();
    let file = std::fs::File::open(path).map_err(|e| Error::input(&field, format!("cannot read the file: {e}")))?;
    let mut bytes = vec![];
    file.take(MAX_INPUT_BYTES + 1).read_to_end(&mut bytes).map_err(|e| Error::input(&field, format!("cannot read the file: {e}")))?;
    if bytes.len() as u64 > MAX_INPUT_BYTES {
        return Err(Error::input(&field, format!("expected an input file of at most {} MiB", MAX_INPUT_BYTES >> 20)));
    }
    String::from_utf8(bytes).map_err(|e| Error::input(&field, format!("expected UTF-8 text (invalid byte at offset {})", e.utf8_error().valid_up_to())))
}

fn molecules(json: bool) -> Result<(), Error> {
    if json {
        println!("{}", serde_json::to_string_pretty(&report::text::molecules_json()).expect("json"));
    } else {
        print!("{}", report::text::molecules_table());
    }
    Ok(())
}

fn run_simulate(path: &Path, out: Option<&Path>, json: bool) -> Result<(), Error> {
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
            let run = scope.spawn(|| kicktrain::simulate::simulate_with_progress(&scenario, progress.clone()));
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
        simulate(&scenario)
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
const DEFAULT_OBJECTIVE: &str = include_str!("../objectives/two-pulse-room-temperature.json");

/// Progress bar and Ctrl-C flag for a design search.
struct Progress {
    bar: indicatif::ProgressBar,
    stop: &'static AtomicBool,
    stage_start: AtomicUsize,
}

impl Monitor for Progress {
    fn stage(&self, name: &str, planned: usize) {
        self.stage_start.store(usize::MAX, Ordering::Relaxed);
        self.bar.set_length(planned.max(1) as u64);
        self.bar.set_position(0);
        self.bar.reset_eta();
        self.bar.set_prefix(name.to_string());
    }
    fn evaluated(&self, evaluations: usize, best: Option<f64>) {
        let start = self.stage_start.load(Ordering::Relaxed);
        let start = if start == usize::MAX {
            self.stage_start.store(evaluations - 1, Ordering::Relaxed);
            evaluations - 1
        } else {
            start
        };
        let done = (evaluations - start) as u64;
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

fn run_design(
    path: Option<&Path>,
    out: Option<&Path>,
    seed: Option<u64>,
    effort: Option<&str>,
    time_limit: Option<f64>,
    quiet: bool,
    json: bool,
) -> Result<Finish, Error> {
    let (text, name) = match path {
        Some(p) => (read_text(p)?, p.display().to_string()),
        None => (DEFAULT_OBJECTIVE.to_string(), "built-in objective two-pulse-room-temperature.json".to_string()),
    };
    let mut obj = Objective::from_json_str(&text, &name)?;
    if let Some(s) = seed {
        obj.search.seed = s;
    }
    if let Some(e) = effort {
        obj.search.effort =
            kicktrain::design::Effort::parse(e).ok_or_else(|| Error::input("--effort", format!("expected quick, normal or thorough, got \"{e}\"")))?;
    }
    if let Some(t) = time_limit {
        if !(t > 0.0 && t <= 1e7) {
            return Err(Error::input("--time-limit", format!("expected a time above 0 and at most 1e7 s, got {t}")));
        }
        obj.search.time_limit_s = Some(t);
    }
    let staged = prepare_out(out, "design")?;
    GRACEFUL.store(true, Ordering::SeqCst);
    let bar = if quiet { indicatif::ProgressBar::hidden() } else { indicatif::ProgressBar::new(1) };
    bar.set_style(indicatif::ProgressStyle::with_template("{prefix:>34} [{bar:30}] {pos}/{len} {msg} (ETA {eta})").expect("template").progress_chars("=> "));
    if !quiet {
        eprintln!("designing: {} ({} pulse(s){}, seed {})", name, obj.space.pulses.len(), if obj.variable_count { " at most" } else { "" }, obj.search.seed);
    }
    let monitor = Progress { bar, stop: &STOP, stage_start: AtomicUsize::new(usize::MAX) };
    let result = design(&obj, &monitor)?;
    monitor.bar.finish_and_clear();
    let summary = match staged {
        Some(o) => {
            let summary = report::design::write_design(&obj, &result, o.path())?;
            o.commit()?;
            summary
        }
        None => report::design::design_summary(&obj, &result),
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

fn run_pendular(name: &str, intensity: f64, static_kv_cm: f64, temperature_k: f64, j_max: u32, json: bool) -> Result<(), Error> {
    let mol = kicktrain::molecule::Molecule::from_library(name, "molecule")?;
    if !temperature_k.is_finite() || !(0.0..=5000.0).contains(&temperature_k) {
        return Err(Error::input("temperature_k", format!("expected 0 to 5000 K, got {temperature_k}")));
    }
    if j_max > 40 {
        return Err(Error::input("j_max", format!("expected at most 40 for a listing, got {j_max}")));
    }
    let r = kicktrain::pendular::pendular(&mol, intensity, static_kv_cm, temperature_k, j_max)?;
    if json {
        println!("{}", serde_json::to_string_pretty(&report::text::pendular_json(&mol.name, intensity, static_kv_cm, temperature_k, &r)).expect("json"));
    } else {
        print!("{}", report::text::pendular_text(&mol.name, intensity, static_kv_cm, temperature_k, j_max, &r));
    }
    Ok(())
}

fn run_focus(focus: kicktrain::optics::Focus, fwhm_fs: f64, shape: &str, molecule: Option<&str>, json: bool) -> Result<(), Error> {
    let r = kicktrain::optics::focus_report(&focus, fwhm_fs, shape, molecule)?;
    if json {
        println!("{}", serde_json::to_string_pretty(&report::text::focus_json(&r)).expect("json"));
    } else {
        print!("{}", report::text::focus_text(&r));
    }
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn run_scan(
    path: &Path,
    x: &str,
    from: f64,
    to: f64,
    steps: usize,
    y: Option<&str>,
    y_from: Option<f64>,
    y_to: Option<f64>,
    y_steps: usize,
    out: Option<&Path>,
    quiet: bool,
) -> Result<Finish, Error> {
    use kicktrain::scan::{Axis, scan};
    let text = read_text(path)?;
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
    let xa = Axis::linear(x, from, to, steps)?;
    let ya = match y {
        None => None,
        Some(p) => {
            let (a, b) = (
                y_from.ok_or_else(|| Error::input("y-from", "missing; a 2D scan needs --y-from and --y-to"))?,
                y_to.ok_or_else(|| Error::input("y-to", "missing; a 2D scan needs --y-from and --y-to"))?,
            );
            Some(Axis::linear(p, a, b, y_steps)?)
        }
    };
    let total = steps * ya.as_ref().map(|a| a.values.len()).unwrap_or(1);
    let staged = prepare_out(out, "scan")?;
    GRACEFUL.store(true, Ordering::SeqCst);
    let bar = if quiet { indicatif::ProgressBar::hidden() } else { indicatif::ProgressBar::new(total as u64) };
    bar.set_style(indicatif::ProgressStyle::with_template("scan [{bar:30}] {pos}/{len} (ETA {eta})").expect("template").progress_chars("=> "));
    let t0 = std::time::Instant::now();
    let r = scan(&base, &xa, ya.as_ref(), &|| bar.inc(1), &STOP)?;
    if r.finished() == 0 {
        return Err(Error::Interrupted);
    }
    let partial = report::scan::scan_partial(&r);
    bar.finish_and_clear();
    if let Some(p) = &partial {
        println!("{p}");
    }
    print!("{}", report::scan::scan_summary(&r, t0.elapsed().as_secs_f64()));
    let outputs = || vec![("scan.csv", report::scan::scan_csv(&r)), ("scan.svg", report::scan::scan_svg(&r, partial.as_deref()))];
    write_and_finish(staged, out, outputs, partial.as_deref().map(report::scan::scan_partial_note))
}

fn run_tolerance(path: &Path, noise: kicktrain::tolerance::Noise, samples: usize, seed: u64, out: Option<&Path>) -> Result<Finish, Error> {
    let scenario = read_scenario(path)?;
    let staged = prepare_out(out, "tolerance")?;
    GRACEFUL.store(true, Ordering::SeqCst);
    let t0 = std::time::Instant::now();
    let r = kicktrain::tolerance::tolerance(&scenario, noise, samples, seed, &STOP)?;
    let partial = report::scan::tolerance_partial(&r);
    if let Some(p) = &partial {
        println!("{p}");
    }
    let goal = scenario.goal.expect("checked by tolerance()");
    print!("{}", report::scan::tolerance_summary(&goal, noise, seed, &r, t0.elapsed().as_secs_f64()));
    let outputs = || vec![("tolerance.csv", report::scan::tolerance_csv(&r)), ("tolerance.svg", report::scan::tolerance_svg(&goal, noise, &r))];
    write_and_finish(staged, out, outputs, partial.as_deref().map(report::scan::tolerance_partial_note))
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
