//! Goals: what a design should achieve (peak, value at a time, mean, minimum of an alignment
//! observable in a window after the last pulse). Data and parsing only; scoring lives in `observe`.

use crate::error::{Error, Result, require_positive};
use crate::input::{Fields, as_f64, join};
use serde_json::{Value, json};

/// Which alignment observable a goal uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Observable {
    /// ⟨cos²θ⟩.
    Cos2,
    /// ⟨cos²θ_2D⟩, the projection onto a detector plane containing Z.
    Cos2TwoD,
    /// ⟨cosθ⟩, the orientation (needs a field that breaks head–tail symmetry).
    Cos,
    /// Three-axis alignment of a top: the smaller of ⟨cos²⟩ of the alignment axis with Z and of the
    /// second most polarizable axis with X.
    ThreeAxis,
}

impl Observable {
    /// True if the observable needs ⟨cos²θ_2D⟩ computed (the one rule every run for a goal follows).
    pub fn needs_cos2_2d(&self) -> bool {
        *self == Observable::Cos2TwoD
    }

    /// Name as written in files and CSV columns.
    pub fn name(&self) -> &'static str {
        match self {
            Observable::Cos2 => "cos2",
            Observable::Cos2TwoD => "cos2_2d",
            Observable::Cos => "cos",
            Observable::ThreeAxis => "three_axis",
        }
    }
}

/// What the design should achieve, in a window measured from the centre of the last pulse.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum GoalKind {
    /// Largest value reached in the window.
    Peak,
    /// Value at a fixed time after the last pulse centre (ps).
    ValueAt(f64),
    /// Mean over the window (long-lasting alignment).
    Mean,
    /// Smallest value in the window (anti-alignment, planar delocalization).
    Minimum,
}

/// The goal: kind, observable and window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Goal {
    /// What to achieve.
    pub kind: GoalKind,
    /// Which observable.
    pub observable: Observable,
    /// Window [start, stop] in ps after the last pulse centre.
    pub window_ps: (f64, f64),
    /// Sampling step in the window, fs.
    pub step_fs: f64,
}

/// A scored design: the value of the observable that the goal looks at, and when.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Score {
    /// The goal's value (the observable's peak, value, mean or minimum).
    pub value: f64,
    /// Time of the optimum (ps, absolute), where meaningful.
    pub t_ps: Option<f64>,
}

impl Goal {
    /// Name of the goal kind.
    pub fn kind_name(&self) -> &'static str {
        match self.kind {
            GoalKind::Peak => "peak",
            GoalKind::ValueAt(_) => "value_at",
            GoalKind::Mean => "mean",
            GoalKind::Minimum => "minimum",
        }
    }

    /// +1 when larger values are better, −1 for the minimum goal.
    pub fn sense(&self) -> f64 {
        if self.kind == GoalKind::Minimum { -1.0 } else { 1.0 }
    }

    /// Sample times (ps, absolute) for a train whose last pulse is centred at `t_last`.
    pub fn times(&self, t_last: f64) -> Vec<f64> {
        match self.kind {
            GoalKind::ValueAt(t) => vec![t_last + t],
            _ => {
                let (a, b) = self.window_ps;
                let dt = self.step_fs / 1000.0;
                let n = ((b - a) / dt).ceil().max(1.0) as usize;
                (0..=n).map(|i| t_last + a + (b - a) * i as f64 / n as f64).collect()
            }
        }
    }
}

impl Goal {
    /// The goal as JSON, readable by `parse_goal`.
    pub fn to_value(&self) -> Value {
        let mut v = json!({"kind": self.kind_name(), "observable": self.observable.name(), "step_fs": self.step_fs});
        match self.kind {
            GoalKind::ValueAt(t) => v["at_ps"] = json!(t),
            _ => v["window_ps"] = json!([self.window_ps.0, self.window_ps.1]),
        }
        v
    }
}

/// Read a goal object found at `path`.
pub fn parse_goal(v: &Value, path: &str) -> Result<Goal> {
    let mut f = Fields::new(v, path)?;
    let kind_s = f.opt_str("kind", "\"peak\", \"value_at\", \"mean\" or \"minimum\"")?.unwrap_or("peak");
    let observable = match f.opt_str("observable", "\"cos2\", \"cos2_2d\", \"cos\" or \"three_axis\"")?.unwrap_or("cos2") {
        "cos2" => Observable::Cos2,
        "cos2_2d" => Observable::Cos2TwoD,
        "cos" => Observable::Cos,
        "three_axis" => Observable::ThreeAxis,
        other => {
            return Err(Error::input(join(path, "observable"), format!("expected \"cos2\", \"cos2_2d\", \"cos\" or \"three_axis\", got \"{other}\"")));
        }
    };
    let at = f.opt_f64("at_ps", "ps after the last pulse centre")?;
    let window = match f.opt_value("window_ps") {
        None => None,
        Some(Value::Array(a)) if a.len() == 2 => {
            let p = join(path, "window_ps");
            Some((as_f64(&a[0], &format!("{p}[0]"), "ps")?, as_f64(&a[1], &format!("{p}[1]"), "ps")?))
        }
        Some(other) => return Err(Error::input(join(path, "window_ps"), format!("expected [start_ps, stop_ps] after the last pulse centre, got {other}"))),
    };
    let step_fs = f.opt_f64("step_fs", "fs")?.unwrap_or(10.0);
    f.finish()?;
    require_positive(&join(path, "step_fs"), step_fs, "fs")?;
    let kind = match kind_s {
        "peak" => GoalKind::Peak,
        "mean" => GoalKind::Mean,
        "minimum" => GoalKind::Minimum,
        "value_at" => GoalKind::ValueAt(
            at.ok_or_else(|| Error::input(join(path, "at_ps"), "missing; expected the time (ps) after the last pulse centre for kind \"value_at\""))?,
        ),
        other => return Err(Error::input(join(path, "kind"), format!("expected \"peak\", \"value_at\", \"mean\" or \"minimum\", got \"{other}\""))),
    };
    let window_ps = match (kind, window) {
        (GoalKind::ValueAt(t), _) => (t, t),
        (_, Some(w)) => w,
        (_, None) => return Err(Error::input(join(path, "window_ps"), "missing; expected [start_ps, stop_ps] after the last pulse centre")),
    };
    if !matches!(kind, GoalKind::ValueAt(_)) {
        if window_ps.1 <= window_ps.0 {
            return Err(Error::input(join(path, "window_ps"), format!("expected stop > start, got [{}, {}]", window_ps.0, window_ps.1)));
        }
        if (window_ps.1 - window_ps.0) * 1000.0 / step_fs > 20_000.0 {
            return Err(Error::input(join(path, "step_fs"), "the goal window would hold more than 20000 samples; expected a larger step_fs"));
        }
    }
    if window_ps.0 < 0.0 {
        return Err(Error::input(
            join(path, if matches!(kind, GoalKind::ValueAt(_)) { "at_ps" } else { "window_ps" }),
            "expected times ≥ 0 after the last pulse centre",
        ));
    }
    Ok(Goal { kind, observable, window_ps, step_fs })
}
