//! Exit codes and signals: how a command ends, and what SIGINT and SIGTERM do to it.

use std::sync::atomic::{AtomicBool, Ordering};

/// Exit code: the output could not be written (nothing written).
pub const EXIT_IO: u8 = 3;
/// Exit code: stopped by a signal; the result so far was reported and written, marked partial.
pub const EXIT_PARTIAL: u8 = 4;
/// Exit code: stopped by a signal before anything could be reported; nothing written (128 + SIGINT).
pub const EXIT_INTERRUPTED: u8 = 130;

/// How a command ended.
pub enum Finish {
    /// Everything asked for was done.
    Done,
    /// Stopped by a signal; what was done is reported and written, marked partial.
    Partial,
}

/// Set by the first SIGINT or SIGTERM; the commands that can stop cleanly poll it.
pub static STOP: AtomicBool = AtomicBool::new(false);
/// True while the running command stops cleanly on a first signal (design, scan, tolerance).
pub static GRACEFUL: AtomicBool = AtomicBool::new(false);

/// SIGINT and SIGTERM (what a batch scheduler sends at its time limit): a command that can stop cleanly
/// finishes its current step and writes what it has; any other command, or a second signal, quits at
/// once and removes its unfinished output. A signal during the final renames of an output folder waits
/// for them, so a folder is always complete or absent.
pub fn install_signal_handler() {
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
