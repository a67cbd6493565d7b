//! The crate's error type: every user-facing failure names the field and what was expected.

use std::fmt;

/// An error from kicktrain, with a one-line message fit for a user.
#[derive(Debug, Clone, PartialEq)]
pub enum Error {
    /// A bad value in an input file or argument: the dotted field path and what was expected.
    Input {
        /// Dotted path of the offending field, e.g. `pulses[0].fwhm_fs`.
        field: String,
        /// What was expected (unit or range) and what was given.
        message: String,
    },
    /// The numerical method could not reach the requested accuracy (e.g. basis limit).
    Numerical(String),
    /// Reading or writing a file failed.
    Io(String),
    /// The run was interrupted by the user.
    Interrupted,
}

impl Error {
    /// An input error for `field` with an explanation of what was expected.
    pub fn input(field: impl Into<String>, message: impl Into<String>) -> Self {
        Error::Input { field: field.into(), message: message.into() }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Input { field, message } => write!(f, "{}: {}", shorten(field, 200), shorten(message, 400)),
            Error::Numerical(m) => write!(f, "numerical limit: {m}"),
            Error::Io(m) => write!(f, "{m}"),
            Error::Interrupted => write!(f, "interrupted"),
        }
    }
}

impl std::error::Error for Error {}

/// `s` cut to at most `max` characters with an ellipsis, so an error never echoes a huge input.
fn shorten(s: &str, max: usize) -> std::borrow::Cow<'_, str> {
    if s.chars().count() <= max { std::borrow::Cow::Borrowed(s) } else { std::borrow::Cow::Owned(s.chars().take(max).collect::<String>() + "…") }
}

/// Result alias used throughout the crate.
pub type Result<T> = std::result::Result<T, Error>;

/// Check that `value` is finite and strictly positive; the error names `field` and its `unit`.
pub fn require_positive(field: &str, value: f64, unit: &str) -> Result<f64> {
    if !value.is_finite() || value <= 0.0 {
        return Err(Error::input(field, format!("expected a finite number > 0 ({unit}), got {value}")));
    }
    Ok(value)
}

/// Longest time from zero any input may name, ps (10 µs: far beyond any nanosecond pulse and its delays).
pub const MAX_TIME_PS: f64 = 1e7;

/// Check that a time (ps) is finite and within ±[`MAX_TIME_PS`]; the error names `field`.
pub fn require_time_ps(field: &str, value: f64) -> Result<f64> {
    if !value.is_finite() || value.abs() > MAX_TIME_PS {
        return Err(Error::input(field, format!("expected a time within ±1e7 ps (10 µs), got {value:e}")));
    }
    Ok(value)
}

/// Check that `value` is finite and ≥ 0; the error names `field` and its `unit`.
pub fn require_non_negative(field: &str, value: f64, unit: &str) -> Result<f64> {
    if !value.is_finite() || value < 0.0 {
        return Err(Error::input(field, format!("expected a finite number ≥ 0 ({unit}), got {value}")));
    }
    Ok(value)
}

/// Check that `value` is finite; the error names `field` and its `unit`.
pub fn require_finite(field: &str, value: f64, unit: &str) -> Result<f64> {
    if !value.is_finite() {
        return Err(Error::input(field, format!("expected a finite number ({unit}), got {value}")));
    }
    Ok(value)
}

/// Levenshtein distance between two strings (for name suggestions).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for i in 1..=a.len() {
        let mut cur = vec![i; b.len() + 1];
        for j in 1..=b.len() {
            let sub = prev[j - 1] + usize::from(a[i - 1] != b[j - 1]);
            cur[j] = sub.min(prev[j] + 1).min(cur[j - 1] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}
