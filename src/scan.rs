//! Parameter scans: the same scenario evaluated over a 1D or 2D grid of any numeric field of the
//! scenario file (for example `pulses[1].center_ps` × `pulses[1].peak_intensity_wcm2`), in parallel.

use crate::design::score::score_goal;
use crate::error::{Error, Result};
use crate::scenario::Scenario;
use crate::shard::Shard;
use crate::simulate::Solver;
use rayon::prelude::*;
use serde_json::Value;
use std::sync::atomic::{AtomicBool, Ordering};

/// One scanned axis: a dotted path into the scenario JSON and the values it takes.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Path such as `pulses[1].center_ps` or `temperature_k`.
    pub path: String,
    /// The values, in order.
    pub values: Vec<f64>,
}

impl Axis {
    /// `steps` evenly spaced values from `from` to `to` inclusive.
    pub fn linear(path: &str, from: f64, to: f64, steps: usize) -> Result<Axis> {
        if !from.is_finite() || !to.is_finite() {
            return Err(Error::input(path, "expected finite scan limits"));
        }
        if !(1..=1000).contains(&steps) {
            return Err(Error::input(format!("{path} steps"), format!("expected 1 to 1000 steps, got {steps}")));
        }
        let values = if steps == 1 { vec![from] } else { (0..steps).map(|i| from + (to - from) * i as f64 / (steps - 1) as f64).collect() };
        Ok(Axis { path: path.to_string(), values })
    }

    /// The axis as a person reads it: `pulses[1].peak_intensity_wcm2` → "pulse 2 peak intensity (W/cm²)".
    pub fn label(&self) -> String {
        readable_path(&self.path)
    }
}

/// Unit suffixes of scenario keys and how a label shows them (longest first, so `_kv_cm` wins over `_cm`).
const UNIT_SUFFIXES: [(&str, &str); 17] = [
    ("_wcm2", "W/cm²"),
    ("_kv_cm", "kV/cm"),
    ("_debye", "D"),
    ("_rad", "rad"),
    ("_deg", "°"),
    ("_thz", "THz"),
    ("_a3", "Å³"),
    ("_cm", "cm⁻¹"),
    ("_ps", "ps"),
    ("_fs", "fs"),
    ("_mj", "mJ"),
    ("_um", "µm"),
    ("_mm", "mm"),
    ("_nm", "nm"),
    ("_au", "a.u."),
    ("_k", "K"),
    ("_s", "s"),
];

/// A key path such as `pulses[1].center_ps` in words: array entries counted from 1, the unit suffix in
/// brackets, `center` spelt "centre".
pub fn readable_path(path: &str) -> String {
    let mut words: Vec<String> = vec![];
    let mut unit = None;
    let parts: Vec<&str> = path.split('.').collect();
    for (i, part) in parts.iter().enumerate() {
        let (key, index) = match part.find('[') {
            Some(b) => (&part[..b], part[b + 1..].trim_end_matches(']').parse::<usize>().ok()),
            None => (*part, None),
        };
        let mut key = key.to_string();
        if i + 1 == parts.len()
            && let Some((suffix, u)) = UNIT_SUFFIXES.iter().find(|(s, _)| key.len() > s.len() && key.ends_with(s))
        {
            key.truncate(key.len() - suffix.len());
            unit = Some(*u);
        }
        let name = match key.as_str() {
            "pulses" => "pulse".to_string(),
            "two_colour" => "two-colour pulse".to_string(),
            "terahertz" => "terahertz pulse".to_string(),
            "center" => "centre".to_string(),
            "fwhm" => "FWHM".to_string(),
            "b" => "B".to_string(),
            k => k.replace('_', " "),
        };
        words.push(match index {
            Some(n) => format!("{name} {}", n + 1),
            None => name,
        });
    }
    let text = words.join(" ");
    match unit {
        Some(u) => format!("{text} ({u})"),
        None => text,
    }
}

/// What a scan reports at each point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Metric {
    /// The scenario's goal (as the designer scores it).
    Goal,
    /// Largest ⟨cos²θ⟩ in the window after the last pulse.
    PeakCos2,
}

/// The result of a scan: `values[iy][ix]` (iy = 0 for 1D scans).
#[derive(Debug, Clone)]
pub struct ScanResult {
    /// The first axis.
    pub x: Axis,
    /// The second axis, if any.
    pub y: Option<Axis>,
    /// What was computed.
    pub metric: Metric,
    /// Values, rows over y, columns over x (NaN where `done` is false).
    pub values: Vec<Vec<f64>>,
    /// Which points were computed (all of them unless the scan was stopped).
    pub done: Vec<Vec<bool>>,
}

impl ScanResult {
    /// Number of points computed.
    pub fn finished(&self) -> usize {
        self.done.iter().flatten().filter(|d| **d).count()
    }

    /// True when the scan was stopped before every point was computed.
    pub fn partial(&self) -> bool {
        self.done.iter().flatten().any(|d| !d)
    }

    /// True when every point `shard` owns was computed.
    pub fn part_complete(&self, shard: Shard) -> bool {
        self.done.iter().flatten().enumerate().all(|(i, d)| *d || !shard.owns(i))
    }

    /// The result as a part file holds it: axes, metric, and per point its value or null.
    pub fn part_value(&self) -> Value {
        let axis = |a: &Axis| serde_json::json!({"path": a.path, "values": a.values});
        let values: Vec<Vec<Value>> =
            self.values.iter().zip(&self.done).map(|(row, done)| row.iter().zip(done).map(|(v, d)| number_value(*v, *d)).collect()).collect();
        serde_json::json!({
            "x": axis(&self.x),
            "y": self.y.as_ref().map(axis),
            "metric": match self.metric { Metric::Goal => "goal", Metric::PeakCos2 => "peak_cos2" },
            "values": values,
        })
    }

    /// One scan from the results of its parts (in any order, each from [`ScanResult::part_value`]): every
    /// point must come from exactly one part, and the parts must share their axes and metric.
    pub fn merge(parts: &[Value]) -> Result<ScanResult> {
        let bad = |what: &str| Error::input("parts", format!("the parts' scan results {what}"));
        let axis = |v: &Value| -> Result<Axis> {
            let path = v.get("path").and_then(Value::as_str).ok_or_else(|| bad("lack an axis path"))?;
            let values = v.get("values").and_then(Value::as_array).ok_or_else(|| bad("lack axis values"))?;
            Ok(Axis {
                path: path.to_string(),
                values: values.iter().map(|x| x.as_f64().ok_or_else(|| bad("hold an axis value that is not a number"))).collect::<Result<_>>()?,
            })
        };
        let first = parts.first().ok_or_else(|| bad("are empty"))?;
        let x = axis(first.get("x").ok_or_else(|| bad("lack the x axis"))?)?;
        let y = match first.get("y") {
            None | Some(Value::Null) => None,
            Some(v) => Some(axis(v)?),
        };
        let metric = match first.get("metric").and_then(Value::as_str) {
            Some("goal") => Metric::Goal,
            Some("peak_cos2") => Metric::PeakCos2,
            _ => return Err(bad("name no known metric")),
        };
        let rows = y.as_ref().map(|a| a.values.len()).unwrap_or(1);
        let mut values = vec![vec![f64::NAN; x.values.len()]; rows];
        let mut done = vec![vec![false; x.values.len()]; rows];
        for p in parts {
            if p.get("x") != first.get("x") || p.get("y") != first.get("y") || p.get("metric") != first.get("metric") {
                return Err(bad("differ in their axes or metric"));
            }
            let grid = p.get("values").and_then(Value::as_array).filter(|g| g.len() == rows).ok_or_else(|| bad("do not fit their axes"))?;
            for (iy, row) in grid.iter().enumerate() {
                let row = row.as_array().filter(|r| r.len() == x.values.len()).ok_or_else(|| bad("do not fit their axes"))?;
                for (ix, v) in row.iter().enumerate() {
                    if v.is_null() {
                        continue;
                    }
                    if done[iy][ix] {
                        return Err(bad(&format!("hold the point ({ix}, {iy}) twice")));
                    }
                    values[iy][ix] = v.as_f64().or_else(|| v.as_str().and_then(|t| t.parse().ok())).ok_or_else(|| bad("hold a value that is not a number"))?;
                    done[iy][ix] = true;
                }
            }
        }
        Ok(ScanResult { x, y, metric, values, done })
    }
}

/// A point's value in a part file: null when not done, a string for a value JSON has no number for.
fn number_value(v: f64, done: bool) -> Value {
    match (done, v.is_finite()) {
        (false, _) => Value::Null,
        (true, true) => serde_json::json!(v),
        (true, false) => Value::String(v.to_string()),
    }
}

/// Set a number at a dotted path like `pulses[1].center_ps` inside a JSON value.
pub fn set_path(root: &mut Value, path: &str, x: f64) -> Result<()> {
    let mut cur = root;
    for part in path.split('.') {
        let (key, index) = match part.find('[') {
            Some(i) => {
                let idx: usize = part[i + 1..].trim_end_matches(']').parse().map_err(|_| Error::input(path, format!("cannot read the index in \"{part}\"")))?;
                (&part[..i], Some(idx))
            }
            None => (part, None),
        };
        cur = cur.get_mut(key).ok_or_else(|| Error::input(path, format!("the scenario has no field \"{key}\" here")))?;
        if let Some(i) = index {
            cur = cur.get_mut(i).ok_or_else(|| Error::input(path, format!("\"{key}\" has no element {i}")))?;
        }
    }
    if !cur.is_number() {
        return Err(Error::input(path, "expected the path of a number in the scenario"));
    }
    *cur = serde_json::json!(x);
    Ok(())
}

/// Evaluate the metric of one scenario with a solver built for the same molecule, temperature and settings.
fn evaluate(s: &Scenario, solver: &Solver, metric: Metric) -> Result<f64> {
    match (metric, &s.goal) {
        (Metric::Goal, Some(goal)) => {
            let t_last = s.last_pulse_center_ps();
            let times = goal.times(t_last);
            let with_2d = goal.observable != crate::goal::Observable::Cos2;
            let run = match &s.focal_average {
                None => solver.run(&s.field, &times, with_2d)?,
                Some(a) => solver.run_focal(&s.field, &times, with_2d, a)?,
            };
            Ok(score_goal(goal, &run.trace, &run.final_sums, t_last).value)
        }
        _ => {
            let times = s.window.times_ps();
            let run = match &s.focal_average {
                None => solver.run(&s.field, &times, false)?,
                Some(a) => solver.run_focal(&s.field, &times, false, a)?,
            };
            let after = s.field.last_pulse_end_ps().unwrap_or(f64::NEG_INFINITY);
            Ok(run.trace.max_after(&run.trace.cos2, after).map(|e| e.value).unwrap_or(f64::NAN))
        }
    }
}

/// A scan or tolerance run may take this many times a single run's `solver.max_steps` in all.
pub const COMMAND_STEP_FACTOR: f64 = 50.0;

/// Scan `base` (the scenario as JSON) over one or two axes; `progress` is called after each point. Once
/// `stop` is set no new point starts; the points finished so far are returned (see [`ScanResult::done`]).
/// With `shard`, only the points that part owns (row-major index i, y outer) are computed; the others
/// stay not done (see [`ScanResult::part_value`] and [`ScanResult::merge`]).
pub fn scan(base: &Value, x: &Axis, y: Option<&Axis>, shard: Option<Shard>, progress: &(dyn Fn() + Sync), stop: &AtomicBool) -> Result<ScanResult> {
    let base_scenario = Scenario::from_value(base, "")?;
    let metric = if base_scenario.goal.is_some() { Metric::Goal } else { Metric::PeakCos2 };
    let ys: Vec<Option<f64>> = match y {
        Some(a) => a.values.iter().map(|v| Some(*v)).collect(),
        None => vec![None],
    };
    let points: Vec<(usize, usize)> = (0..ys.len()).flat_map(|iy| (0..x.values.len()).map(move |ix| (iy, ix))).collect();
    // Build every scenario first: errors name the scanned field.
    let scenarios: Vec<Scenario> = points
        .iter()
        .map(|&(iy, ix)| {
            let mut v = base.clone();
            set_path(&mut v, &x.path, x.values[ix])?;
            if let (Some(a), Some(yv)) = (y, ys[iy]) {
                set_path(&mut v, &a.path, yv)?;
            }
            Scenario::from_value(&v, "").map_err(|e| match e {
                Error::Input { field, message } => Error::input(
                    field,
                    format!(
                        "{message} (at scan point {} = {}{})",
                        x.path,
                        x.values[ix],
                        y.map(|a| format!(", {} = {}", a.path, ys[iy].unwrap_or(0.0))).unwrap_or_default()
                    ),
                ),
                other => other,
            })
        })
        .collect::<Result<_>>()?;
    let shared = Solver::new(&base_scenario.molecule, base_scenario.temperature_k, base_scenario.solver)?;
    let same = |s: &Scenario| s.molecule == base_scenario.molecule && s.temperature_k == base_scenario.temperature_k && s.solver == base_scenario.solver;
    let owned = |i: usize| shard.is_none_or(|sh| sh.owns(i));
    // The whole scan's finite-pulse steps (each point is also checked alone when it runs); a part checks its own.
    let total: f64 = scenarios.iter().enumerate().filter(|(i, s)| owned(*i) && same(s)).map(|(_, s)| shared.time_steps(&s.field).0).sum();
    let limit = COMMAND_STEP_FACTOR * base_scenario.solver.max_steps;
    if total > limit {
        let key = if y.is_some() { "--steps × --y-steps" } else { "--steps" };
        return Err(Error::input(
            key,
            format!(
                "the scan would take {total:.2e} time steps in all ({} points), above {COMMAND_STEP_FACTOR} × solver.max_steps = {limit:.0e}; use fewer points, the kick model, or --allow-long",
                scenarios.len()
            ),
        ));
    }
    let flat: Vec<Option<f64>> = scenarios
        .par_iter()
        .enumerate()
        .map(|(i, s)| {
            if !owned(i) || stop.load(Ordering::SeqCst) {
                return Ok(None);
            }
            let v = if same(s) { evaluate(s, &shared, metric) } else { evaluate(s, &Solver::new(&s.molecule, s.temperature_k, s.solver)?, metric) };
            progress();
            v.map(Some)
        })
        .collect::<Result<_>>()?;
    let values = flat.chunks(x.values.len()).map(|c| c.iter().map(|v| v.unwrap_or(f64::NAN)).collect()).collect();
    let done = flat.chunks(x.values.len()).map(|c| c.iter().map(Option::is_some).collect()).collect();
    Ok(ScanResult { x: x.clone(), y: y.cloned(), metric, values, done })
}

#[cfg(test)]
mod label_tests {
    use super::readable_path;

    #[test]
    fn key_paths_read_as_words_with_units() {
        // The labels scan.svg puts on its axes (the CSV keeps the key path).
        assert_eq!(readable_path("pulses[1].peak_intensity_wcm2"), "pulse 2 peak intensity (W/cm²)");
        assert_eq!(readable_path("pulses[1].center_ps"), "pulse 2 centre (ps)");
        assert_eq!(readable_path("pulses[0].fwhm_fs"), "pulse 1 FWHM (fs)");
        assert_eq!(readable_path("temperature_k"), "temperature (K)");
        assert_eq!(readable_path("static_field.strength_kv_cm"), "static field strength (kV/cm)");
        assert_eq!(readable_path("two_colour[0].phase_rad"), "two-colour pulse 1 phase (rad)");
        assert_eq!(readable_path("molecule.b_cm"), "molecule B (cm⁻¹)");
        assert_eq!(readable_path("weird"), "weird");
    }
}
