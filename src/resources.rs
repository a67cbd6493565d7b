//! Estimates of the memory a run needs, checked against what the machine has before the work starts.

use crate::error::{Error, Result};

/// Largest share of the available memory one run may plan to use.
pub const MEMORY_SHARE: f64 = 0.5;

/// Memory the operating system reports as available to a new allocation, bytes (Linux
/// `/proc/meminfo` MemAvailable); None where it cannot be read.
pub fn available_memory_bytes() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024.0)
}

/// Environment variable that caps the memory one run may plan to use, in GB (for a shared node or a
/// batch job's memory request); without it the cap is [`MEMORY_SHARE`] of the available memory.
pub const MEMORY_CAP_VAR: &str = "KICKTRAIN_MAX_MEMORY_GB";

/// Refuse a run whose estimated memory `bytes` exceeds the cap (the variable [`MEMORY_CAP_VAR`], else
/// [`MEMORY_SHARE`] of the available memory); the one-line error names `key`, the input that drives
/// the estimate, and `what` the memory holds.
pub fn check_memory(bytes: f64, key: &str, what: &str) -> Result<()> {
    let cap = match std::env::var(MEMORY_CAP_VAR) {
        Ok(v) => match v.trim().parse::<f64>() {
            Ok(gb) if gb.is_finite() && gb > 0.0 => Some(gb * 1e9),
            _ => return Err(Error::input(MEMORY_CAP_VAR, format!("expected a positive number of GB, got {v:?}"))),
        },
        Err(_) => None,
    };
    check_memory_against(bytes, available_memory_bytes(), cap, key, what)
}

fn check_memory_against(bytes: f64, available: Option<f64>, cap: Option<f64>, key: &str, what: &str) -> Result<()> {
    let need = format!("{what} would need about {:.2} GB", bytes / 1e9);
    match (cap, available) {
        (Some(cap), _) if bytes > cap => Err(Error::input(key, format!("{need}, more than the {:.2} GB {MEMORY_CAP_VAR} allows", cap / 1e9))),
        (None, Some(avail)) if bytes > MEMORY_SHARE * avail => {
            Err(Error::input(key, format!("{need}, more than half of the {:.1} GB this machine has available", avail / 1e9)))
        }
        _ => Ok(()),
    }
}

/// Memory of a sampled trace and its CSV text: `samples` rows of `columns` numbers (8 bytes each in
/// memory, about 16 characters in the CSV) for each of `copies` traces (focal averages keep two).
pub fn trace_bytes(samples: usize, columns: usize, copies: usize) -> f64 {
    samples as f64 * columns as f64 * (8.0 + 16.0) * copies as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn refuses_only_above_half_of_what_is_available() {
        assert!(check_memory_against(0.4e9, Some(1e9), None, "window.step_fs", "the trace").is_ok());
        let e = check_memory_against(0.6e9, Some(1e9), None, "window.step_fs", "the trace").unwrap_err().to_string();
        assert!(e.starts_with("window.step_fs: the trace would need about 0.60 GB"), "{e}");
        assert!(check_memory_against(1e15, None, None, "k", "x").is_ok(), "unknown memory: no refusal");
        // A cap set by the user applies whatever the machine has.
        assert!(check_memory_against(0.3e9, Some(1e12), Some(0.2e9), "pulses", "x").unwrap_err().to_string().contains(MEMORY_CAP_VAR));
        assert!(check_memory_against(0.1e9, None, Some(0.2e9), "pulses", "x").is_ok());
        assert_eq!(trace_bytes(1000, 10, 2), 480_000.0);
    }
}
