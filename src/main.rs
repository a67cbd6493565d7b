//! kicktrain command line: a thin front end over the library (parse, call, print, exit code).

mod cli;

use clap::Parser;
use cli::args::{Cli, Command};
use cli::commands;
use cli::signals::{EXIT_INTERRUPTED, EXIT_IO, EXIT_PARTIAL, Finish, install_signal_handler};
use kicktrain::error::Error;
use std::process::ExitCode;
use std::sync::atomic::Ordering;

fn main() -> ExitCode {
    // Like other Unix tools, stop quietly when the reader of stdout goes away (`kicktrain … | head`);
    // Rust ignores SIGPIPE by default, which turns the closed pipe into a panic in println!.
    #[cfg(unix)]
    // SAFETY: restoring the default disposition of one signal before any thread starts.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    let cli = Cli::parse();
    commands::ALLOW_LONG.store(cli.allow_long, Ordering::SeqCst);
    install_signal_handler();
    let result = match cli.command {
        Command::Molecules { json } => commands::molecules(json).map(|()| Finish::Done),
        Command::Simulate { scenario, out, json } => commands::run_simulate(&scenario, out.as_deref(), json).map(|()| Finish::Done),
        Command::Pendular { molecule, intensity_wcm2, static_kv_cm, static_angle_deg, temperature_k, j_max, json } => {
            commands::run_pendular(&molecule, intensity_wcm2, static_kv_cm, static_angle_deg, temperature_k, j_max, json).map(|()| Finish::Done)
        }
        Command::Focus { energy_mj, fwhm_fs, shape, waist_um, beam_radius_mm, wavelength_nm, focal_length_mm, m2, molecule, json } => commands::run_focus(
            kicktrain::optics::Focus { energy_mj, waist_um, beam_radius_mm, wavelength_nm, focal_length_mm, m2 },
            fwhm_fs,
            &shape,
            molecule.as_deref(),
            json,
        )
        .map(|()| Finish::Done),
        Command::Scan(args) => commands::run_scan(&args),
        Command::Limits(args) => commands::run_limits(&args),
        Command::Tolerance(args) => commands::run_tolerance(&args),
        Command::Merge { parts, out } => commands::run_merge(&parts, out.as_deref()),
        Command::Cluster(args) => cli::cluster::run_cluster(&args),
        Command::Design(args) => commands::run_design(&args),
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
