//! Goals: what a design should achieve (peak, value at a time, mean, minimum of an alignment
//! observable in a window after the last pulse). Data and parsing only; scoring lives in `observe`.

use crate::error::{Error, Result};
use crate::molecule::{Molecule, RotorKind};
use serde::{Deserialize, Serialize};

/// Which alignment observable a goal uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Observable {
    /// ⟨cos²θ⟩.
    Cos2,
    /// ⟨cos²θ_2D⟩, the projection onto a detector plane containing Z.
    #[serde(rename = "cos2_2d")]
    Cos2TwoD,
    /// ⟨cosθ⟩, the orientation (needs a field that breaks head–tail symmetry).
    Cos,
    /// ⟨cosθ⟩ with the lab X axis: orientation towards X, which a static field tilted from Z towards X
    /// gives a linear molecule.
    #[serde(rename = "cos_x")]
    CosX,
    /// Three-axis alignment of a top: the smaller of ⟨cos²⟩ of the alignment axis with Z and of the
    /// second most polarizable axis with X.
    ThreeAxis,
    /// Three-dimensional orientation of a polar top: the smaller of ⟨cosθ⟩ of the dipole axis with Z and
    /// ⟨cos²⟩ with X of the most polarizable axis other than the dipole axis (held in the XZ plane, along
    /// X). Computed where a static field meets pulses polarized away from Z or is itself tilted.
    ThreeAxisOriented,
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
            Observable::CosX => "cos_x",
            Observable::ThreeAxis => "three_axis",
            Observable::ThreeAxisOriented => "three_axis_oriented",
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
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
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
    /// Check that `molecule` has what the goal's observable reads (a three-axis goal needs a top; ⟨cosθ_X⟩
    /// of the dipole axis is computed wherever the static field is tilted); errors name `{path}.observable`.
    pub fn check_rotor(&self, molecule: &Molecule, path: &str) -> Result<()> {
        let at = || if path.is_empty() { "observable".to_string() } else { format!("{path}.observable") };
        if self.observable == Observable::ThreeAxis && molecule.kind() == RotorKind::Linear {
            return Err(Error::input(at(), format!("a three-axis goal needs a symmetric or asymmetric top; {} is linear (one axis)", molecule.name)));
        }
        if self.observable == Observable::ThreeAxisOriented && (molecule.kind() == RotorKind::Linear || !molecule.is_polar()) {
            return Err(Error::input(at(), format!("a three-axis orientation goal needs a polar symmetric or asymmetric top; {} is not one", molecule.name)));
        }
        Ok(())
    }
}
