//! kicktrain command line: a thin front end over the library (parse, load, call, report).

use clap::{Parser, Subcommand};
use kicktrain::error::Error;
use kicktrain::molecule::library;
use kicktrain::report;
use kicktrain::scenario::Scenario;
use kicktrain::simulate::simulate;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Parser)]
#[command(name = "kicktrain", version, about = "Design and simulate laser pulse trains that align gas-phase molecules.",
    after_help = "Examples:\n  kicktrain molecules\n  kicktrain simulate examples/scenarios/nitrogen-one-pulse.json --out run1\n\n\
Lasers that align molecules are class 4: follow your laser safety officer and IEC 60825-1 / ANSI Z136.1.")]
struct Cli {
    #[command(subcommand)]
    command: Command,
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
    /// Simulate one scenario file: alignment trace, summary and plot.
    #[command(after_help = "Example:\n  kicktrain simulate examples/scenarios/nitrogen-one-pulse.json --out run1\n\n\
The scenario is JSON: {\"molecule\": \"N2\", \"temperature_k\": 300,\n  \"pulses\": [{\"center_ps\": 0, \"fwhm_fs\": 50, \"peak_intensity_wcm2\": 5e13}],\n  \"window\": {\"start_ps\": 0.2, \"stop_ps\": 12, \"step_fs\": 20}}\n\
--out DIR writes summary.json, trace.csv (t_ps,cos2,cos2_2d) and alignment.svg.")]
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
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Molecules { json } => molecules(json),
        Command::Simulate { scenario, out, json } => run_simulate(&scenario, out.as_deref(), json),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e}");
            match e {
                Error::Input { .. } => ExitCode::from(2),
                Error::Interrupted => ExitCode::from(130),
                _ => ExitCode::from(1),
            }
        }
    }
}

fn read_text(path: &Path) -> Result<String, Error> {
    std::fs::read_to_string(path).map_err(|e| Error::input(path.display().to_string(), format!("cannot read the file: {e}")))
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
                })
            })
            .collect();
        println!("{}", serde_json::to_string_pretty(&list).expect("json"));
        return Ok(());
    }
    println!("{:<6} {:>11} {:>10} {:>8} {:>8} {:>7} {:>9}  description", "name", "B (cm⁻¹)", "D (cm⁻¹)", "α∥ (Å³)", "α⊥ (Å³)", "Δα", "even:odd");
    for e in library() {
        println!(
            "{:<6} {:>11.6} {:>10.3e} {:>8.3} {:>8.3} {:>7.3} {:>4}:{:<4}  {}",
            e.name, e.b_cm.value, e.d_cm.value, e.alpha_parallel_a3.value, e.alpha_perpendicular_a3.value,
            e.alpha_parallel_a3.value - e.alpha_perpendicular_a3.value, e.spin_weights[0], e.spin_weights[1], e.description
        );
    }
    println!("\nSources of every constant: kicktrain molecules --json");
    Ok(())
}

fn run_simulate(path: &Path, out: Option<&Path>, json: bool) -> Result<(), Error> {
    let text = read_text(path)?;
    let scenario = Scenario::from_json_str(&text, &path.display().to_string())?;
    let sim = simulate(&scenario)?;
    let summary = match out {
        Some(dir) => report::write_simulation(&sim, dir)?,
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
            println!(
                "  pulse {}: centre {} ps, FWHM {} fs, {:.3e} W/cm², kick strength {:.3} ({})",
                i + 1, p["center_ps"], p["fwhm_fs"], p["peak_intensity_wcm2"].as_f64().unwrap_or(0.0),
                p["kick_strength"].as_f64().unwrap_or(0.0), p["method"].as_str().unwrap_or("")
            );
        }
    }
    println!("  peak ⟨cos²θ⟩ after the last pulse    {}", fmt_ext(&s["peak_cos2"]));
    println!("  peak ⟨cos²θ_2D⟩ after the last pulse {}", fmt_ext(&s["peak_cos2_2d"]));
    println!("  deepest anti-alignment ⟨cos²θ⟩      {}", fmt_ext(&s["min_cos2"]));
    println!("  permanent alignment ⟨cos²θ⟩         {:.4}", s["permanent_cos2"].as_f64().unwrap_or(f64::NAN));
    println!("  revival period                      {:.4} ps", s["revival_period_ps"].as_f64().unwrap_or(0.0));
    println!(
        "  {} initial states (discarded population {:.1e}); basis up to J = {} (edge population {:.1e}); {:.3} s",
        s["thermal"]["initial_states"], s["thermal"]["discarded_population"].as_f64().unwrap_or(0.0),
        s["basis"]["max_j"], s["basis"]["max_edge_population"].as_f64().unwrap_or(0.0), s["run_time_s"].as_f64().unwrap_or(0.0)
    );
    if !s["pulses"].as_array().map(|a| a.is_empty()).unwrap_or(true) {
        println!("  {}", report::LASER_SAFETY);
    }
}
