//! kicktrain command line: a thin front end over the library (parse, load, call, report).

use clap::{Parser, Subcommand};
use kicktrain::design::Objective;
use kicktrain::design::search::{Monitor, design};
use kicktrain::error::Error;
use kicktrain::molecule::library;
use kicktrain::report;
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

/// Exit code: the output could not be read or written (nothing written).
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
fn prepare_out(out: Option<&Path>, command: &str) -> Result<Option<kicktrain::report::output::OutputDir>, Error> {
    out.map(|d| kicktrain::report::output::OutputDir::prepare(d, command)).transpose()
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
        let list: Vec<_> = library()
            .iter()
            .map(|e| {
                serde_json::json!({
                    "name": e.name, "aliases": e.aliases, "description": e.description,
                    "b_cm": {"value": e.b_cm.value, "source": e.b_cm.source},
                    "d_cm": {"value": e.d_cm.value, "source": e.d_cm.source},
                    "alpha_parallel_a3": {"value": e.alpha_parallel_a3.value, "source": e.alpha_parallel_a3.source},
                    "alpha_perpendicular_a3": {"value": e.alpha_perpendicular_a3.value, "source": e.alpha_perpendicular_a3.source},
                    "spin_weights": {"value": e.spin_weights, "source": e.spin_weights_source},
                    "dipole_debye": e.dipole_debye.map(|d| serde_json::json!({"value": d.value, "source": d.source})),
                    "beta_parallel_au": e.beta_parallel_au.map(|d| serde_json::json!({"value": d.value, "source": d.source})),
                    "beta_perpendicular_au": e.beta_perpendicular_au.map(|d| serde_json::json!({"value": d.value, "source": d.source})),
                    "ionization_energy_ev": e.ionization_energy_ev.map(|d| serde_json::json!({"value": d.value, "source": d.source})),
                })
            })
            .collect();
        let tops: Vec<_> = kicktrain::molecule::top_library()
            .iter()
            .map(|e| {
                let sv = |x: &kicktrain::molecule::Sourced| serde_json::json!({"value": x.value, "source": x.source});
                serde_json::json!({
                    "name": e.name, "aliases": e.aliases, "description": e.description,
                    "a_cm": sv(&e.constants_cm[0]), "b_cm": sv(&e.constants_cm[1]), "c_cm": sv(&e.constants_cm[2]),
                    "d_j_cm": sv(&e.distortion_cm[0]), "d_jk_cm": sv(&e.distortion_cm[1]),
                    "polarizability_a3": {"a": sv(&e.polarizability_a3[0]), "b": sv(&e.polarizability_a3[1]), "c": sv(&e.polarizability_a3[2])},
                    "dipole": e.dipole.map(|d| serde_json::json!({"value_debye": d.0.value, "axis": d.1.letter(), "source": d.0.source})),
                    "spin_weights": {"value": e.spin_weights, "source": e.spin_weights_source},
                    "ionization_energy_ev": e.ionization_energy_ev.map(|d| sv(&d)),
                })
            })
            .collect();
        println!("{}", serde_json::to_string_pretty(&serde_json::json!({"linear": list, "tops": tops})).expect("json"));
        return Ok(());
    }
    println!(
        "{:<6} {:>11} {:>10} {:>8} {:>8} {:>7} {:>9} {:>7} {:>15}  description",
        "name", "B (cm⁻¹)", "D (cm⁻¹)", "α∥ (Å³)", "α⊥ (Å³)", "Δα", "even:odd", "μ (D)", "β∥, β⊥ (a.u.)"
    );
    for e in library() {
        let dipole = e.dipole_debye.map(|d| format!("{:.4}", d.value)).unwrap_or_else(|| "—".into());
        let beta = match (e.beta_parallel_au, e.beta_perpendicular_au) {
            (Some(a), Some(b)) => format!("{:.2}, {:.2}", a.value, b.value),
            _ => "—".into(),
        };
        println!(
            "{:<6} {:>11.6} {:>10.3e} {:>8.3} {:>8.3} {:>7.3} {:>4}:{:<4} {:>7} {:>15}  {}",
            e.name,
            e.b_cm.value,
            e.d_cm.value,
            e.alpha_parallel_a3.value,
            e.alpha_perpendicular_a3.value,
            e.alpha_parallel_a3.value - e.alpha_perpendicular_a3.value,
            e.spin_weights[0],
            e.spin_weights[1],
            dipole,
            beta,
            e.description
        );
    }
    println!("\n{:<6} {:>9} {:>9} {:>9} {:>6} {:>21}  description", "top", "A (cm⁻¹)", "B (cm⁻¹)", "C (cm⁻¹)", "κ", "α_a, α_b, α_c (Å³)");
    for e in kicktrain::molecule::top_library() {
        let m = e.molecule();
        let t = m.top.as_ref().expect("top");
        let p = t.polarizability_a3;
        println!(
            "{:<6} {:>9.5} {:>9.5} {:>9.5} {:>6.2} {:>6.2}, {:>5.2}, {:>5.2}  {}",
            e.name,
            t.a_cm,
            t.b_cm,
            t.c_cm,
            t.kappa(),
            p[0],
            p[1],
            p[2],
            e.description
        );
    }
    println!("\nSources of every constant: kicktrain molecules --json");
    Ok(())
}

fn run_simulate(path: &Path, out: Option<&Path>, json: bool) -> Result<(), Error> {
    let scenario = read_scenario(path)?;
    let staged = prepare_out(out, "simulate")?;
    // On a terminal, a ticking line with the elapsed time, so a long run is visibly alive.
    let spinner = if std::io::IsTerminal::is_terminal(&std::io::stderr()) && !json {
        let sp = indicatif::ProgressBar::new_spinner();
        sp.set_style(indicatif::ProgressStyle::with_template("{spinner} simulating {msg} ({elapsed})").expect("template"));
        sp.set_message(format!("{} at {} K", scenario.molecule.name, scenario.temperature_k));
        sp.enable_steady_tick(std::time::Duration::from_millis(200));
        Some(sp)
    } else {
        None
    };
    let sim = simulate(&scenario);
    if let Some(sp) = spinner {
        sp.finish_and_clear();
    }
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
        print_simulation(&summary);
        if let Some(dir) = out {
            println!("wrote {}/summary.json, trace.csv, alignment.svg", dir.display());
        }
    }
    Ok(())
}

/// ", polarized at A° from Z, ellipticity E" for pulses not polarized along Z (empty otherwise).
/// ", switched off … fs from the peak" for a truncated pulse cut away from its peak (JSON `cut_fs`).
fn cut_text(p: &serde_json::Value) -> String {
    p["cut_fs"].as_f64().map(|c| format!(", switched off {c:+.1} fs from the peak")).unwrap_or_default()
}

fn polarization_text(v: &serde_json::Value) -> String {
    let (a, e) = (v["angle_deg"].as_f64().unwrap_or(0.0), v["ellipticity"].as_f64().unwrap_or(0.0));
    if a == 0.0 && e == 0.0 { String::new() } else { format!(", polarized at {a:.1}° from Z towards X, ellipticity {e:.3}") }
}

fn fmt_ext(v: &serde_json::Value) -> String {
    match (v.get("value").and_then(|x| x.as_f64()), v.get("t_ps").and_then(|x| x.as_f64())) {
        (Some(a), Some(t)) => format!("{a:.4} at {t:.3} ps"),
        _ => "— (window ends before the last pulse)".into(),
    }
}

fn print_simulation(s: &serde_json::Value) {
    println!("{} at {} K", s["molecule"]["name"].as_str().unwrap_or("?"), s["temperature_k"]);
    if let Some(ps) = s["pulses"].as_array() {
        for (i, p) in ps.iter().enumerate() {
            let energy = match (p["energy_mj"].as_f64(), p["waist_um"].as_f64()) {
                (Some(e), Some(w)) => format!(" ({e} mJ focused to w0 = {w:.1} µm)"),
                _ => String::new(),
            };
            let ion = p["ionized_fraction_adk"].as_f64().map(|x| format!(", ionized ≈ {x:.1e} (ADK estimate)")).unwrap_or_default();
            println!(
                "  pulse {}: centre {:.4} ps, FWHM {} fs, {:.3e} W/cm²{energy}, kick strength {:.3} ({}){ion}{}",
                i + 1,
                p["center_ps"].as_f64().unwrap_or(0.0),
                p["fwhm_fs"],
                p["peak_intensity_wcm2"].as_f64().unwrap_or(0.0),
                p["kick_strength"].as_f64().unwrap_or(0.0),
                p["method"].as_str().unwrap_or(""),
                polarization_text(&p["polarization"]) + &cut_text(p)
            );
        }
    }
    for (i, t) in s["two_colour"].as_array().into_iter().flatten().enumerate() {
        println!(
            "  two-colour pulse {}: centre {:.4} ps, FWHM {} fs, ω {:.3e} W/cm² + 2ω {:.3e} W/cm², phase {:.4} rad",
            i + 1,
            t["center_ps"].as_f64().unwrap_or(0.0),
            t["fwhm_fs"],
            t["fundamental_intensity_wcm2"].as_f64().unwrap_or(0.0),
            t["second_harmonic_intensity_wcm2"].as_f64().unwrap_or(0.0),
            t["phase_rad"].as_f64().unwrap_or(0.0)
        );
    }
    for (i, t) in s["terahertz"].as_array().into_iter().flatten().enumerate() {
        println!(
            "  terahertz pulse {}: centre {:.4} ps, {} fs, peak field {:.1} kV/cm, {}",
            i + 1,
            t["center_ps"].as_f64().unwrap_or(0.0),
            t["duration_fs"],
            t["peak_field_kv_cm"].as_f64().unwrap_or(0.0),
            t["waveform"].as_str().unwrap_or("?").replace('_', "-")
        );
    }
    if let Some(e) = s["static_field"]["strength_kv_cm"].as_f64() {
        let on = s["static_field"]["on_ps"].as_f64().map(|t| format!(" from {t} ps")).unwrap_or_else(|| " (entered adiabatically)".into());
        let off = s["static_field"]["off_ps"].as_f64().map(|t| format!(" until {t} ps")).unwrap_or_default();
        println!("  static field {e:.3} kV/cm{on}{off}");
    }
    println!("  peak ⟨cos²θ⟩ after the last pulse    {}", fmt_ext(&s["peak_cos2"]));
    println!("  peak ⟨cos²θ_2D⟩ after the last pulse {}", fmt_ext(&s["peak_cos2_2d"]));
    if let Some(obj) = s["lab_axes"].as_object() {
        for (name, v) in obj {
            println!("  {:<37}{}", format!("{} after the last pulse", name.replace("peak_cos2_", "peak ⟨cos²⟩ ")), fmt_ext(v));
        }
    }
    println!("  deepest anti-alignment ⟨cos²θ⟩      {}", fmt_ext(&s["min_cos2"]));
    println!("  permanent alignment ⟨cos²θ⟩         {:.4}", s["permanent_cos2"].as_f64().unwrap_or(f64::NAN));
    if let Some(o) = s.get("peak_orientation").filter(|o| !o.is_null()) {
        println!(
            "  peak orientation ⟨cosθ⟩ after the last pulse {:.4} at {:.3} ps (towards {}); permanent {:.4}",
            o["cos"].as_f64().unwrap_or(0.0),
            o["t_ps"].as_f64().unwrap_or(0.0),
            o["sign"].as_str().unwrap_or("?"),
            no_negative_zero(s["permanent_cos"].as_f64().unwrap_or(0.0), 4)
        );
    }
    if let Some(fa) = s.get("focal_average").filter(|v| !v.is_null()) {
        let along = match fa["settings"]["sample_length_um"].as_f64() {
            Some(l) => format!(" (also along the beam over {l} µm)"),
            None => String::new(),
        };
        println!("  focal-volume average{along}: peak ⟨cos²θ⟩ {}, peak ⟨cos²θ_2D⟩ {}", fmt_ext(&fa["peak_cos2"]), fmt_ext(&fa["peak_cos2_2d"]));
    }
    if s["molecule"]["rotor"] == "asymmetric top" {
        println!("  revival period (estimate, (B+C)/2)   {:.4} ps (an asymmetric top has no exact revivals)", s["revival_period_ps"].as_f64().unwrap_or(0.0));
    } else {
        println!("  revival period                      {:.4} ps", s["revival_period_ps"].as_f64().unwrap_or(0.0));
    }
    println!(
        "  {} initial states (discarded population {:.1e}); basis up to J = {} (edge population {:.1e}); {:.3} s",
        s["thermal"]["initial_states"],
        s["thermal"]["discarded_population"].as_f64().unwrap_or(0.0),
        s["basis"]["max_j"],
        s["basis"]["max_edge_population"].as_f64().unwrap_or(0.0),
        s["run_time_s"].as_f64().unwrap_or(0.0)
    );
    let lasers = |key: &str| !s[key].as_array().map(|a| a.is_empty()).unwrap_or(true);
    if lasers("pulses") || lasers("two_colour") || lasers("terahertz") {
        println!("  {}", report::LASER_SAFETY);
    }
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
            let summary = kicktrain::report::design::write_design(&obj, &result, o.path())?;
            o.commit()?;
            summary
        }
        None => kicktrain::report::design::design_summary(&obj, &result),
    };
    if json {
        println!("{}", serde_json::to_string_pretty(&summary).expect("json"));
    } else {
        print_design(&summary);
        if let Some(dir) = out {
            println!("wrote {}/design.json, summary.json, trace.csv, design.svg, history.csv, convergence.svg", dir.display());
            println!("replay: kicktrain simulate {}/design.json", dir.display());
        }
    }
    Ok(if result.interrupted { Finish::Partial } else { Finish::Done })
}

fn print_design(s: &serde_json::Value) {
    let f = |v: &serde_json::Value| v.as_f64().map(|x| format!("{x:.5}")).unwrap_or_else(|| "—".into());
    println!(
        "{} at {} K — goal: {} of {} (window {} ps after the last pulse centre)",
        s["molecule"].as_str().unwrap_or("?"),
        s["temperature_k"],
        s["goal"]["kind"].as_str().unwrap_or("?"),
        s["observable"].as_str().unwrap_or("?"),
        s["goal"].get("window_ps").map(|w| w.to_string()).unwrap_or_else(|| s["goal"]["at_ps"].to_string())
    );
    if s["interrupted"].as_bool() == Some(true) {
        println!("  (search interrupted: best design found so far)");
    }
    if let Some(c) = s["search"]["confidence"].as_object() {
        println!(
            "  search: {} of {} independent starts reached this score (within {}; spread {}), effort {}, stopped by {}",
            c["starts_agreeing"],
            c["starts"],
            c["agreement"],
            f(&c["spread"]),
            s["search"]["effort"].as_str().unwrap_or("?"),
            c["stopped_by"].as_str().unwrap_or("?")
        );
    }
    for w in s["warnings"].as_array().into_iter().flatten() {
        println!("  warning: {}", w.as_str().unwrap_or(""));
    }
    if s["kick_model_score"].is_null() {
        println!(
            "  score {} at {} ps (full solver; pulses too long for the kick model, searched with the full solver throughout)",
            f(&s["score"]),
            f(&s["score_time_ps"])
        );
    } else {
        println!(
            "  score {} at {} ps (full solver); kick model {} (difference {})",
            f(&s["score"]),
            f(&s["score_time_ps"]),
            f(&s["kick_model_score"]),
            f(&s["full_minus_kick_model"])
        );
    }
    if let Some(ps) = s["pulses"].as_array() {
        for p in ps {
            println!(
                "  pulse {}: t = {:.4} ps, {:.4e} W/cm² ({:.0} % of ceiling), FWHM {:.1} fs, kick strength {:.3}{}",
                p["pulse"],
                p["center_ps"].as_f64().unwrap_or(0.0),
                p["peak_intensity_wcm2"].as_f64().unwrap_or(0.0),
                100.0 * p["fraction_of_ceiling"].as_f64().unwrap_or(0.0),
                p["fwhm_fs"].as_f64().unwrap_or(0.0),
                p["kick_strength"].as_f64().unwrap_or(0.0),
                polarization_text(&p["polarization"]) + &cut_text(p)
            );
        }
    }
    if let Some(e) = s["static_field"]["strength_kv_cm"].as_f64() {
        println!("  static field {e:.3} kV/cm (on throughout)");
    }
    if let Some(ps) = s["pulses"].as_array()
        && let Some(p) = ps.first().filter(|p| p["kind"] == "two_colour")
    {
        println!(
            "  two-colour: second-harmonic share {:.3}, phase {:.4} rad",
            p["second_harmonic_intensity_wcm2"].as_f64().unwrap_or(0.0) / p["peak_intensity_wcm2"].as_f64().unwrap_or(1.0),
            p["phase_rad"].as_f64().unwrap_or(0.0)
        );
    }
    if let Some(t) = s["terahertz"].as_array().and_then(|a| a.first()) {
        println!(
            "  terahertz pulse at {:.4} ps, peak field {:.1} kV/cm",
            t["center_ps"].as_f64().unwrap_or(0.0),
            t["peak_field_kv_cm"].as_f64().unwrap_or(0.0)
        );
    }
    println!("  best single pulse under the same ceiling: {} → gain {}", f(&s["single_pulse_baseline"]["score"]), f(&s["gain_over_single_pulse"]));
    if let Some(pc) = s["per_pulse_count"].as_array()
        && pc.len() > 1
    {
        let parts: Vec<String> = pc.iter().map(|c| format!("{}: {}", c["pulses"], f(&c["score"]))).collect();
        println!("  score by pulse count: {}", parts.join(", "));
    }
    println!(
        "  {} kick-model + {} full-solver evaluations in {:.1} s (seed {})",
        s["evaluations"]["kick_model"],
        s["evaluations"]["full_solver"],
        s["run_time_s"].as_f64().unwrap_or(0.0),
        s["seed"]
    );
    println!("  {}", report::LASER_SAFETY);
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
        let v = serde_json::json!({"molecule": mol.name, "intensity_wcm2": intensity, "static_kv_cm": static_kv_cm,
            "temperature_k": temperature_k, "result": r, "laser_safety": report::LASER_SAFETY});
        println!("{}", serde_json::to_string_pretty(&v).expect("json"));
        return Ok(());
    }
    println!(
        "{} in {:.3e} W/cm² and {} kV/cm: laser strength ΔαE0²/4B = {:.3}, dipole strength μE/B = {:.3}",
        mol.name,
        intensity,
        static_kv_cm,
        no_negative_zero(r.laser_strength_b, 3),
        no_negative_zero(r.static_strength_b, 3)
    );
    println!("{:>4} {:>4} {:>14} {:>12} {:>9} {:>9}", "J", "|M|", "energy (cm⁻¹)", "energy (B)", "⟨cos²θ⟩", "⟨cosθ⟩");
    for s in r.states.iter().filter(|s| s.j <= j_max) {
        println!(
            "{:>4} {:>4} {:>14.6} {:>12.5} {:>9.5} {:>9.5}",
            s.j,
            s.m,
            no_negative_zero(s.energy_cm, 6),
            no_negative_zero(s.energy_b, 5),
            s.cos2,
            no_negative_zero(s.cos, 5)
        );
    }
    println!("thermal adiabatic averages at {temperature_k} K: ⟨cos²θ⟩ = {:.5}, ⟨cosθ⟩ = {:.5}", r.thermal_cos2, no_negative_zero(r.thermal_cos, 5));
    println!("(J: the field-free level each state connects to adiabatically; energies exclude the isotropic −¼α⊥E0² shift)");
    if intensity > 0.0 {
        println!("{}", report::LASER_SAFETY);
    }
    Ok(())
}

fn run_focus(focus: kicktrain::optics::Focus, fwhm_fs: f64, shape: &str, molecule: Option<&str>, json: bool) -> Result<(), Error> {
    use kicktrain::field::{Pulse, PulseShape};
    use kicktrain::optics::{ionization, peak_intensity_wcm2, peak_power_w};
    focus.validate("focus")?;
    let shape = PulseShape::parse(shape).ok_or_else(|| Error::input("shape", format!("expected {}, got \"{shape}\"", PulseShape::NAMES)))?;
    let p = Pulse { center_ps: 0.0, fwhm_fs, peak_intensity_wcm2: 1.0, shape, rise_fs: None, cut_fs: None, polarization: Default::default() };
    p.validate("pulse")?;
    // The molecules whose ionization the intensity is compared with: the named one, or every library entry
    // that lists an ionization energy.
    let molecules: Vec<kicktrain::molecule::Molecule> = match molecule {
        Some(name) => {
            let m = kicktrain::molecule::Molecule::from_library(name, "molecule")?;
            if m.ionization_energy_ev.is_none() {
                return Err(Error::input(
                    "molecule",
                    format!("{} has no ionization energy in the library; name another molecule or leave --molecule out", m.name),
                ));
            }
            vec![m]
        }
        None => kicktrain::molecule::library()
            .iter()
            .map(|e| e.molecule())
            .chain(kicktrain::molecule::top_library().iter().map(|e| e.molecule()))
            .filter(|m| m.ionization_energy_ev.is_some())
            .collect(),
    };
    let power = peak_power_w(focus.energy_mj, p.envelope_area_ps());
    let w0 = focus.waist_m();
    let i0 = peak_intensity_wcm2(power, w0);
    let field = kicktrain::units::peak_field_v_per_m(i0);
    let fluence = 2.0 * focus.energy_mj * 1e-3 / (std::f64::consts::PI * (w0 * 100.0).powi(2));
    // The intensity at which one pulse of this shape and duration ionizes 10 % of each molecule (ADK).
    let pulse_at = |i: f64| Pulse { peak_intensity_wcm2: i, ..p.clone() };
    let ceilings: Vec<(String, f64)> = molecules
        .iter()
        .map(|m| (m.name.clone(), ionization::intensity_for_fraction(pulse_at, m.ionization_energy_ev.unwrap_or(f64::INFINITY), IONIZED_WARNING)))
        .collect();
    let warning = ionization_warning(i0, &ceilings);
    if json {
        let v = serde_json::json!({
            "energy_mj": focus.energy_mj, "fwhm_fs": fwhm_fs, "shape": shape,
            "peak_power_w": power, "waist_um": w0 * 1e6, "rayleigh_range_mm": focus.rayleigh_range_mm(),
            "peak_intensity_wcm2": i0, "peak_field_v_per_m": field, "peak_fluence_j_per_cm2": fluence,
            "ionization": {
                "fraction": IONIZED_WARNING,
                "method": "ADK tunnelling estimate for one pulse of this shape and duration (order of magnitude)",
                "intensity_wcm2_by_molecule": ceilings.iter().map(|(n, c)| (n.clone(), serde_json::json!(c))).collect::<serde_json::Map<_, _>>(),
            },
            "warnings": warning.iter().collect::<Vec<_>>(),
            "laser_safety": report::LASER_SAFETY,
        });
        println!("{}", serde_json::to_string_pretty(&v).expect("json"));
        return Ok(());
    }
    println!("pulse energy        {} mJ in {fwhm_fs} fs ({shape:?})", focus.energy_mj);
    println!("peak power          {power:.4e} W");
    println!("focal waist w0      {:.3} µm (1/e² intensity radius)", w0 * 1e6);
    if let Some(z) = focus.rayleigh_range_mm() {
        println!("Rayleigh range      {z:.4} mm");
    }
    println!("peak intensity      {i0:.4e} W/cm² (on axis, at the focus)");
    println!("peak field          {field:.4e} V/m");
    println!("peak fluence        {fluence:.4e} J/cm²");
    if let Some(w) = warning {
        println!("warning: {w}");
    }
    println!("{}", report::LASER_SAFETY);
    Ok(())
}

/// Fraction ionized per pulse (ADK estimate) above which `focus` warns.
const IONIZED_WARNING: f64 = 0.1;

/// A warning when intensity `i0` ionizes at least [`IONIZED_WARNING`] of some of the molecules compared.
fn ionization_warning(i0: f64, ceilings: &[(String, f64)]) -> Option<String> {
    let over: Vec<&(String, f64)> = ceilings.iter().filter(|(_, c)| i0 > *c).collect();
    if over.is_empty() {
        return None;
    }
    let pct = IONIZED_WARNING * 100.0;
    if over.len() == 1 && ceilings.len() == 1 {
        let (n, c) = &ceilings[0];
        return Some(format!(
            "{i0:.2e} W/cm² is above {c:.2e} W/cm², where one such pulse ionizes {pct:.0} % of {n} (ADK estimate): molecules do not survive to be aligned"
        ));
    }
    let highest = ceilings.iter().max_by(|a, b| a.1.total_cmp(&b.1)).expect("not empty");
    if over.len() == ceilings.len() {
        Some(format!(
            "{i0:.2e} W/cm² is above the intensity where one such pulse ionizes {pct:.0} % of every library molecule (ADK estimate; highest {:.2e} W/cm² for {}): molecules do not survive to be aligned",
            highest.1, highest.0
        ))
    } else {
        let names: Vec<&str> = over.iter().map(|(n, _)| n.as_str()).collect();
        Some(format!(
            "{i0:.2e} W/cm² ionizes {pct:.0} % or more of {} of the {} library molecules per pulse (ADK estimate): {}",
            over.len(),
            ceilings.len(),
            names.join(", ")
        ))
    }
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
    use kicktrain::report::svg;
    use kicktrain::scan::{Axis, Metric, scan};
    let text = read_text(path)?;
    let mut base = kicktrain::input::parse_json(&text, &path.display().to_string())?;
    if ALLOW_LONG.load(Ordering::SeqCst)
        && let Some(obj) = base.as_object_mut()
    {
        let solver = obj.entry("solver").or_insert_with(|| serde_json::json!({}));
        if let Some(sv) = solver.as_object_mut() {
            sv.insert("max_steps".into(), serde_json::json!(1e12));
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
    let finished = r.finished();
    if finished == 0 {
        return Err(Error::Interrupted);
    }
    let partial = r.partial().then(|| format!("partial: stopped by a signal after {finished} of {total} points"));
    bar.finish_and_clear();
    let label = match r.metric {
        Metric::Goal => "goal score",
        Metric::PeakCos2 => "peak ⟨cos²θ⟩ after the last pulse",
    };
    let mut best = (f64::NEG_INFINITY, 0, 0);
    for (iy, row) in r.values.iter().enumerate() {
        for (ix, v) in row.iter().enumerate() {
            if *v > best.0 && r.done[iy][ix] {
                best = (*v, ix, iy);
            }
        }
    }
    if let Some(p) = &partial {
        println!("{p}");
    }
    println!(
        "{} points in {:.2} s; {label}: best {:.5} at {} = {}{}",
        finished,
        t0.elapsed().as_secs_f64(),
        best.0,
        xa.path,
        xa.values[best.1],
        ya.as_ref().map(|a| format!(", {} = {}", a.path, a.values[best.2])).unwrap_or_default()
    );
    if let Some(o) = staged {
        let dir = o.path();
        let mut csv = format!("{}{},value\n", xa.path, ya.as_ref().map(|a| format!(",{}", a.path)).unwrap_or_default());
        for (iy, row) in r.values.iter().enumerate() {
            for (ix, v) in row.iter().enumerate().filter(|(ix, _)| r.done[iy][*ix]) {
                match &ya {
                    Some(a) => csv.push_str(&format!("{},{},{:.10}\n", xa.values[ix], a.values[iy], v)),
                    None => csv.push_str(&format!("{},{:.10}\n", xa.values[ix], v)),
                }
            }
        }
        report::write_file(dir, "scan.csv", &csv)?;
        // A scanned intensity, energy or field puts the laser-safety caution on the plot.
        let states_laser = |p: &str| ["intensity", "_wcm2", "energy_mj", "_kv_cm", "field"].iter().any(|k| p.contains(k));
        let caution = (states_laser(&xa.path) || ya.as_ref().is_some_and(|a| states_laser(&a.path)))
            .then(|| "Laser safety: class 4 lasers; follow your local laser safety officer and IEC 60825-1 / ANSI Z136.1.".to_string());
        let caution = match (&partial, caution) {
            (Some(p), Some(c)) => Some(format!("{p}; {c}")),
            (Some(p), None) => Some(p.clone()),
            (None, c) => c,
        };
        let svg_text = match &ya {
            Some(a) => {
                let mut h = svg::Heatmap::new(format!("Scan of {label}"), xa.label(), a.label(), label, xa.values.clone(), a.values.clone(), r.values.clone());
                h.subtitle = caution.clone();
                h.to_svg()
            }
            None => {
                let mut p = svg::LinePlot::new(format!("Scan of {label}"), xa.label(), label);
                p.subtitle = caution.clone();
                p.series.push(svg::Series {
                    label: String::new(),
                    x: xa.values.clone(),
                    y: r.values[0].clone(),
                    color: svg::ALIGNMENT.into(),
                    dashed: false,
                    width: 1.8,
                });
                p.to_svg()
            }
        };
        report::write_file(dir, "scan.svg", &svg_text)?;
        if let Some(p) = &partial {
            report::write_file(dir, "PARTIAL.txt", &format!("{p}; scan.csv holds the finished points, scan.svg leaves the others blank.\n"))?;
        }
        o.commit()?;
        println!(
            "wrote {}/scan.csv, scan.svg{}",
            out.map(|d| d.display().to_string()).unwrap_or_default(),
            if partial.is_some() { ", PARTIAL.txt" } else { "" }
        );
    }
    println!("{}", report::LASER_SAFETY);
    Ok(if partial.is_some() { Finish::Partial } else { Finish::Done })
}

fn run_tolerance(path: &Path, noise: kicktrain::tolerance::Noise, samples: usize, seed: u64, out: Option<&Path>) -> Result<Finish, Error> {
    use kicktrain::report::svg;
    let scenario = read_scenario(path)?;
    let staged = prepare_out(out, "tolerance")?;
    GRACEFUL.store(true, Ordering::SeqCst);
    let t0 = std::time::Instant::now();
    let r = kicktrain::tolerance::tolerance(&scenario, noise, samples, seed, &STOP)?;
    let partial = (r.samples.len() < r.requested).then(|| format!("partial: stopped by a signal after {} of {} samples", r.samples.len(), r.requested));
    if let Some(p) = &partial {
        println!("{p}");
    }
    let goal = scenario.goal.expect("checked by tolerance()");
    println!(
        "{} of {}: nominal {:.5}; with jitter {} fs, energy noise {} %, phase noise {} rad ({} samples, seed {seed}):",
        goal.kind_name(),
        goal.observable.name(),
        r.nominal,
        noise.jitter_fs,
        noise.energy_percent,
        noise.phase_rad,
        r.samples.len()
    );
    println!("  mean {:.5}, spread (rms) {:.5}, worst decile {:.5}; {:.2} s", r.mean, r.spread, r.worst_decile, t0.elapsed().as_secs_f64());
    if let Some(o) = staged {
        let dir = o.path();
        let mut csv = String::from("sample,score\n");
        for (i, v) in r.sample_index.iter().zip(&r.samples) {
            csv.push_str(&format!("{i},{v:.10}\n"));
        }
        report::write_file(dir, "tolerance.csv", &csv)?;
        let mut h = svg::Histogram::new(
            format!("Score under jitter {} fs, energy noise {} %", noise.jitter_fs, noise.energy_percent),
            format!("{} {}", goal.kind_name(), goal.observable.name()),
            r.samples.clone(),
            0,
        );
        h.markers.push(svg::Marker { x0: r.nominal, x1: r.nominal, label: "nominal".into(), color: svg::PULSE.into() });
        h.markers.push(svg::Marker { x0: r.worst_decile, x1: r.worst_decile, label: "worst decile".into(), color: svg::NEUTRAL.into() });
        report::write_file(dir, "tolerance.svg", &h.to_svg())?;
        if let Some(p) = &partial {
            report::write_file(dir, "PARTIAL.txt", &format!("{p}; tolerance.csv and tolerance.svg cover the finished samples.\n"))?;
        }
        o.commit()?;
        println!(
            "wrote {}/tolerance.csv, tolerance.svg{}",
            out.map(|d| d.display().to_string()).unwrap_or_default(),
            if partial.is_some() { ", PARTIAL.txt" } else { "" }
        );
    }
    println!("{}", report::LASER_SAFETY);
    Ok(if partial.is_some() { Finish::Partial } else { Finish::Done })
}

/// `v`, or +0 when it would print as −0 with `decimals` decimals (rounding noise around zero).
fn no_negative_zero(v: f64, decimals: i32) -> f64 {
    if v.abs() < 0.5 * 10f64.powi(-decimals) { 0.0 } else { v }
}
