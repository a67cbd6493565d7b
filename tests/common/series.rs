//! Small helpers for comparing sampled series, shared by the integration tests (`#[path]`-included, so a
//! test takes only these and not the references in `common/mod.rs`).
#![allow(dead_code)]

use kicktrain::field::StaticField;

/// Times from `start` to `stop` (ps) every `step`, both ends included.
pub fn grid(start: f64, stop: f64, step: f64) -> Vec<f64> {
    let n = ((stop - start) / step).round() as usize;
    (0..=n).map(|i| start + i as f64 * step).collect()
}

/// Largest |a − b| over two series of the same length (a length mismatch fails: a comparison of a
/// truncated or empty series must not pass).
pub fn max_diff(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len(), "series of different lengths");
    a.iter().zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max)
}

/// A static field of `kv` kV/cm at `angle_deg` from Z towards X, on from the start.
pub fn static_field(kv: f64, angle_deg: f64) -> Option<StaticField> {
    Some(StaticField { strength_kv_cm: kv, angle_deg, on_ps: None, off_ps: None })
}

/// The lab-axis column `name` of a trace (`cos2_X`, `cos_Zb`, …); panics when it is missing.
pub fn series<'a>(t: &'a kicktrain::observe::Trace, name: &str) -> &'a [f64] {
    t.lab_axes.iter().chain(&t.lab_cos).find(|s| s.name == name).map(|s| s.values.as_slice()).unwrap_or_else(|| panic!("no column {name}"))
}
