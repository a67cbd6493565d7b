//! Designing pulse trains: the design space (parameters ↔ field model), the goal (a score from a
//! propagated ensemble), the objective file that holds both, and the two-stage search.
//!
//! The physics does not know it is being optimized: the search sees a vector in the unit cube, the
//! design space turns it into a `FieldModel`, the solver propagates it and the goal scores it.

pub mod score;
pub mod search;
pub mod seeds;

pub use crate::goal::{Goal, GoalKind, Observable, Score};

use crate::error::{Error, Result, require_non_negative, require_positive};
use crate::field::{FieldModel, Pulse, PulseShape};
use crate::input::{join, parse_json};
use crate::molecule::Molecule;
use crate::scenario::{MoleculeSource, Scenario, SolverSettings, Window};
use serde_json::Value;

/// Pulses shorter than this fraction of the fastest rotational period are screened with the kick model.
pub const KICK_SCREENING_FRACTION: f64 = 0.25;

/// A closed range [min, max]; min = max fixes the value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bounds {
    /// Lower end.
    pub min: f64,
    /// Upper end.
    pub max: f64,
}

impl Bounds {
    /// A fixed value.
    pub fn fixed(v: f64) -> Bounds {
        Bounds { min: v, max: v }
    }

    /// True when the range has no width.
    pub fn is_fixed(&self) -> bool {
        self.max <= self.min
    }

    /// The value at fraction u ∈ [0, 1].
    pub fn at(&self, u: f64) -> f64 {
        if self.is_fixed() { self.min } else { self.min + (self.max - self.min) * u.clamp(0.0, 1.0) }
    }

    /// The fraction of a value (clamped to [0, 1]).
    pub fn fraction(&self, v: f64) -> f64 {
        if self.is_fixed() { 0.5 } else { ((v - self.min) / (self.max - self.min)).clamp(0.0, 1.0) }
    }
}

/// Bounds of one pulse of the train.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PulseBounds {
    /// Delay after the previous pulse's centre, ps (ignored for the first pulse, which sits at t = 0).
    pub delay_ps: Bounds,
    /// Peak intensity, W/cm².
    pub peak_intensity_wcm2: Bounds,
    /// Intensity FWHM, fs.
    pub fwhm_fs: Bounds,
    /// Angle of the polarization's major axis from Z towards X, degrees (fixed 0: along Z).
    pub angle_deg: Bounds,
    /// Ellipticity (minor-to-major field ratio), 0..=1 (fixed 0: linear).
    pub ellipticity: Bounds,
    /// Start of a truncated pulse's switch-off relative to its peak, fs (fixed 0: at the peak).
    pub cut_fs: Bounds,
}

/// The space of pulse trains searched: bounds per pulse and global constraints.
#[derive(Debug, Clone, PartialEq)]
pub struct DesignSpace {
    /// Envelope shape of every pulse.
    pub shape: PulseShape,
    /// Edge duration of flat-top pulses, or the switch-off of truncated ones, fs.
    pub rise_fs: Option<f64>,
    /// Bounds per pulse (the train has this many pulses).
    pub pulses: Vec<PulseBounds>,
    /// Ceiling on every pulse's peak intensity, W/cm².
    pub max_peak_intensity_wcm2: f64,
    /// Optional budget on the summed fluence-time integral Σ∫I dt, J/cm².
    pub max_total_fluence_jcm2: Option<f64>,
    /// Smallest allowed delay between consecutive pulse centres, ps.
    pub min_separation_ps: f64,
    /// Static field for the whole run (kV/cm), fixed or searched; None for no static field.
    pub static_field_kv_cm: Option<Bounds>,
    /// Angle of the static field from Z towards X (degrees), fixed or searched; None for along Z.
    pub static_field_angle_deg: Option<Bounds>,
    /// When set, every pulse is a two-colour (ω + 2ω) pulse: its intensity is the sum of both colours.
    pub two_colour: Option<TwoColourBounds>,
    /// An optional terahertz pulse after the last laser pulse.
    pub terahertz: Option<TerahertzBounds>,
}

/// Bounds of the two-colour parameters shared by all pulses of a train.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TwoColourBounds {
    /// Second-harmonic to fundamental intensity ratio.
    pub ratio: Bounds,
    /// Relative phase φ, rad.
    pub phase_rad: Bounds,
}

/// Bounds of a terahertz pulse placed after the last laser pulse.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TerahertzBounds {
    /// Delay of its centre after the last laser pulse centre, ps (may be negative: before it).
    pub delay_ps: Bounds,
    /// Peak field, kV/cm.
    pub peak_field_kv_cm: Bounds,
    /// Duration, fs.
    pub duration_fs: f64,
    /// Waveform.
    pub waveform: crate::field::TerahertzWaveform,
}

/// What the parameter at one index of the search vector means.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Slot {
    Delay(usize),
    Intensity(usize),
    Fwhm(usize),
    Angle(usize),
    Ellipticity(usize),
    Cut(usize),
    Static,
    StaticAngle,
    Ratio,
    Phase,
    ThzDelay,
    ThzField,
}

impl DesignSpace {
    /// Effective delay bounds of pulse k ≥ 1 (minimum separation applied).
    pub fn delay_bounds(&self, k: usize) -> Bounds {
        let b = self.pulses[k].delay_ps;
        Bounds { min: b.min.max(self.min_separation_ps), max: b.max }
    }

    /// Effective intensity bounds of pulse k (ceiling applied).
    pub fn intensity_bounds(&self, k: usize) -> Bounds {
        let b = self.pulses[k].peak_intensity_wcm2;
        Bounds { min: b.min, max: b.max.min(self.max_peak_intensity_wcm2) }
    }

    fn slots(&self) -> Vec<Slot> {
        let mut s = vec![];
        for k in 0..self.pulses.len() {
            if k > 0 && !self.delay_bounds(k).is_fixed() {
                s.push(Slot::Delay(k));
            }
            if !self.intensity_bounds(k).is_fixed() {
                s.push(Slot::Intensity(k));
            }
            if !self.pulses[k].fwhm_fs.is_fixed() {
                s.push(Slot::Fwhm(k));
            }
            if !self.pulses[k].angle_deg.is_fixed() {
                s.push(Slot::Angle(k));
            }
            if !self.pulses[k].ellipticity.is_fixed() {
                s.push(Slot::Ellipticity(k));
            }
            if !self.pulses[k].cut_fs.is_fixed() {
                s.push(Slot::Cut(k));
            }
        }
        if self.static_field_kv_cm.map(|b| !b.is_fixed()).unwrap_or(false) {
            s.push(Slot::Static);
        }
        if self.static_field_kv_cm.is_some() && self.static_field_angle_deg.map(|b| !b.is_fixed()).unwrap_or(false) {
            s.push(Slot::StaticAngle);
        }
        if let Some(tc) = &self.two_colour {
            if !tc.ratio.is_fixed() {
                s.push(Slot::Ratio);
            }
            if !tc.phase_rad.is_fixed() {
                s.push(Slot::Phase);
            }
        }
        if let Some(th) = &self.terahertz {
            if !th.delay_ps.is_fixed() {
                s.push(Slot::ThzDelay);
            }
            if !th.peak_field_kv_cm.is_fixed() {
                s.push(Slot::ThzField);
            }
        }
        s
    }

    /// Number of free parameters.
    pub fn dims(&self) -> usize {
        self.slots().len()
    }

    /// Grid points of the exhaustive line search along each free parameter: delays are scanned every
    /// fifth of the shortest allowed pulse duration, but at least every 10 fs (kicks arrive at narrow
    /// revival features, and a pulse of duration τ smooths features finer than about τ/5), on 100 to
    /// 3000 points; the other parameters on 41 points.
    pub fn line_points(&self) -> Vec<usize> {
        let shortest_ps = self.pulses.iter().map(|p| p.fwhm_fs.min).fold(f64::INFINITY, f64::min) / 1000.0;
        let step_ps = (shortest_ps / 5.0).max(0.01);
        let fine = |b: Bounds| (((b.max - b.min) / step_ps).ceil() as usize).clamp(100, 3000);
        self.slots()
            .iter()
            .map(|s| match *s {
                Slot::Delay(k) => fine(self.delay_bounds(k)),
                Slot::ThzDelay => fine(self.terahertz.expect("terahertz bounds").delay_ps),
                _ => 41,
            })
            .collect()
    }

    /// Names of the free parameters, e.g. "pulse 2 delay (ps)".
    pub fn parameter_names(&self) -> Vec<String> {
        self.slots()
            .iter()
            .map(|s| match s {
                Slot::Delay(k) => format!("pulse {} delay (ps)", k + 1),
                Slot::Intensity(k) => format!("pulse {} peak intensity (W/cm²)", k + 1),
                Slot::Fwhm(k) => format!("pulse {} FWHM (fs)", k + 1),
                Slot::Angle(k) => format!("pulse {} polarization angle (deg)", k + 1),
                Slot::Ellipticity(k) => format!("pulse {} ellipticity", k + 1),
                Slot::Cut(k) => format!("pulse {} switch-off from the peak (fs)", k + 1),
                Slot::Static => "static field (kV/cm)".to_string(),
                Slot::StaticAngle => "static field angle from Z (deg)".to_string(),
                Slot::Ratio => "second-harmonic ratio".to_string(),
                Slot::Phase => "two-colour phase (rad)".to_string(),
                Slot::ThzDelay => "terahertz delay (ps)".to_string(),
                Slot::ThzField => "terahertz peak field (kV/cm)".to_string(),
            })
            .collect()
    }

    /// The pulse train for a point u of the unit cube. Feasible by construction: pulses in order with at
    /// least the minimum separation, every intensity within its bounds and the ceiling, and the fluence
    /// budget met by scaling all intensities down together when needed.
    pub fn field(&self, u: &[f64]) -> FieldModel {
        let n = self.pulses.len();
        let mut delay = vec![0.0; n];
        let mut inten: Vec<f64> = (0..n).map(|k| self.intensity_bounds(k).min).collect();
        let mut fwhm: Vec<f64> = self.pulses.iter().map(|p| p.fwhm_fs.min).collect();
        let mut angle: Vec<f64> = self.pulses.iter().map(|p| p.angle_deg.min).collect();
        let mut ellipticity: Vec<f64> = self.pulses.iter().map(|p| p.ellipticity.min).collect();
        let mut cut: Vec<f64> = self.pulses.iter().map(|p| p.cut_fs.min).collect();
        for (k, d) in delay.iter_mut().enumerate().skip(1) {
            *d = self.delay_bounds(k).min;
        }
        let mut static_kv = self.static_field_kv_cm.map(|b| b.min);
        let mut static_angle = self.static_field_angle_deg.map(|b| b.min).unwrap_or(0.0);
        let mut ratio = self.two_colour.map(|t| t.ratio.min).unwrap_or(0.0);
        let mut phase = self.two_colour.map(|t| t.phase_rad.min).unwrap_or(0.0);
        let mut thz_delay = self.terahertz.map(|t| t.delay_ps.min).unwrap_or(0.0);
        let mut thz_field = self.terahertz.map(|t| t.peak_field_kv_cm.min).unwrap_or(0.0);
        for (slot, &x) in self.slots().iter().zip(u) {
            match *slot {
                Slot::Delay(k) => delay[k] = self.delay_bounds(k).at(x),
                Slot::Intensity(k) => inten[k] = self.intensity_bounds(k).at(x),
                Slot::Fwhm(k) => fwhm[k] = self.pulses[k].fwhm_fs.at(x),
                Slot::Angle(k) => angle[k] = self.pulses[k].angle_deg.at(x),
                Slot::Ellipticity(k) => ellipticity[k] = self.pulses[k].ellipticity.at(x),
                Slot::Cut(k) => cut[k] = self.pulses[k].cut_fs.at(x),
                Slot::Static => static_kv = self.static_field_kv_cm.map(|b| b.at(x)),
                Slot::StaticAngle => static_angle = self.static_field_angle_deg.map(|b| b.at(x)).unwrap_or(0.0),
                Slot::Ratio => ratio = self.two_colour.expect("two-colour bounds").ratio.at(x),
                Slot::Phase => phase = self.two_colour.expect("two-colour bounds").phase_rad.at(x),
                Slot::ThzDelay => thz_delay = self.terahertz.expect("terahertz bounds").delay_ps.at(x),
                Slot::ThzField => thz_field = self.terahertz.expect("terahertz bounds").peak_field_kv_cm.at(x),
            }
        }
        let mut t = 0.0;
        let mut pulses: Vec<Pulse> = (0..n)
            .map(|k| {
                t += delay[k];
                let polarization = crate::field::PulsePolarization { angle_deg: angle[k], ellipticity: ellipticity[k] };
                // A switch-off at the peak is the truncated shape's default: leave the key out.
                let cut_fs = (self.shape == PulseShape::Truncated && cut[k] != 0.0).then_some(cut[k]);
                Pulse { center_ps: t, fwhm_fs: fwhm[k], peak_intensity_wcm2: inten[k], shape: self.shape, rise_fs: self.rise_fs, cut_fs, polarization }
            })
            .collect();
        if let Some(budget) = self.max_total_fluence_jcm2 {
            let total: f64 = pulses.iter().map(fluence_jcm2).sum();
            if total > budget {
                let f = budget / total;
                pulses.iter_mut().for_each(|p| p.peak_intensity_wcm2 *= f);
            }
        }
        let t_last = pulses.last().map(|p| p.center_ps).unwrap_or(0.0);
        let mut field = FieldModel { pulses, ..Default::default() };
        field.static_field = static_kv.map(|e| crate::field::StaticField { strength_kv_cm: e, angle_deg: static_angle, on_ps: None, off_ps: None });
        if self.two_colour.is_some() {
            // The designed intensity is shared by the two colours: I1 = I/(1+r), I2 = r I/(1+r).
            field.two_colour = std::mem::take(&mut field.pulses)
                .into_iter()
                .map(|p| crate::field::TwoColourPulse {
                    center_ps: p.center_ps,
                    fwhm_fs: p.fwhm_fs,
                    fundamental_intensity_wcm2: p.peak_intensity_wcm2 / (1.0 + ratio),
                    second_harmonic_intensity_wcm2: p.peak_intensity_wcm2 * ratio / (1.0 + ratio),
                    phase_rad: phase,
                    shape: p.shape,
                })
                .collect();
        }
        if let Some(th) = &self.terahertz {
            field.terahertz = vec![crate::field::TerahertzPulse {
                center_ps: t_last + thz_delay,
                duration_fs: th.duration_fs,
                peak_field_kv_cm: thz_field,
                waveform: th.waveform,
            }];
        }
        field
    }

    /// The same space with only the first `n` pulses.
    pub fn truncated(&self, n: usize) -> DesignSpace {
        DesignSpace { pulses: self.pulses[..n].to_vec(), ..self.clone() }
    }

    /// Check that a train satisfies every constraint (used by tests and before writing a design).
    pub fn check(&self, field: &FieldModel) -> std::result::Result<(), String> {
        let tol = 1e-9;
        for (k, tc) in field.two_colour.iter().enumerate() {
            if tc.fundamental_intensity_wcm2 + tc.second_harmonic_intensity_wcm2 > self.max_peak_intensity_wcm2 * (1.0 + tol) {
                return Err(format!("two-colour pulse {} exceeds the ceiling", k + 1));
            }
            if k > 0 && tc.center_ps - field.two_colour[k - 1].center_ps < self.min_separation_ps - tol {
                return Err(format!("two-colour pulses {} and {} are closer than the minimum separation", k, k + 1));
            }
        }
        if let Some(b) = self.max_total_fluence_jcm2 {
            let total: f64 = field
                .two_colour
                .iter()
                .map(|t| (t.fundamental_intensity_wcm2 + t.second_harmonic_intensity_wcm2) * t.envelope_pulse().envelope_area_ps() * 1e-12)
                .sum();
            if total > b * (1.0 + tol) {
                return Err(format!("total two-colour fluence {total} J/cm² exceeds the budget {b} J/cm²"));
            }
        }
        for (k, p) in field.pulses.iter().enumerate() {
            if p.peak_intensity_wcm2 > self.max_peak_intensity_wcm2 * (1.0 + tol) {
                return Err(format!("pulse {} exceeds the ceiling", k + 1));
            }
            if k > 0 && p.center_ps - field.pulses[k - 1].center_ps < self.min_separation_ps - tol {
                return Err(format!("pulses {} and {} are closer than the minimum separation", k, k + 1));
            }
        }
        if let Some(b) = self.max_total_fluence_jcm2 {
            let total: f64 = field.pulses.iter().map(fluence_jcm2).sum();
            if total > b * (1.0 + tol) {
                return Err(format!("total fluence {total} J/cm² exceeds the budget {b} J/cm²"));
            }
        }
        Ok(())
    }

    /// Reject spaces with no feasible design before any search; errors name the field.
    pub fn validate(&self, path: &str) -> Result<()> {
        require_positive(&join(path, "max_peak_intensity_wcm2"), self.max_peak_intensity_wcm2, "W/cm²")?;
        if self.max_peak_intensity_wcm2 > 1e17 {
            return Err(Error::input(join(path, "max_peak_intensity_wcm2"), format!("expected at most 1e17 W/cm², got {:e}", self.max_peak_intensity_wcm2)));
        }
        require_non_negative(&join(path, "min_separation_ps"), self.min_separation_ps, "ps")?;
        for k in 0..self.pulses.len() {
            let p = &self.pulses[k];
            let pp = format!("{}[{k}]", join(path, "pulses.each"));
            if p.fwhm_fs.min <= 0.0 || p.fwhm_fs.max < p.fwhm_fs.min {
                return Err(Error::input(format!("{pp}.fwhm_fs"), format!("expected 0 < min ≤ max (fs), got [{}, {}]", p.fwhm_fs.min, p.fwhm_fs.max)));
            }
            let ib = self.intensity_bounds(k);
            if p.peak_intensity_wcm2.min < 0.0 || ib.max < ib.min {
                return Err(Error::input(
                    format!("{pp}.peak_intensity_wcm2"),
                    format!(
                        "no feasible intensity: bounds [{:e}, {:e}] W/cm² under the ceiling {:e} W/cm²",
                        p.peak_intensity_wcm2.min, p.peak_intensity_wcm2.max, self.max_peak_intensity_wcm2
                    ),
                ));
            }
            if k > 0 {
                if p.delay_ps.max > 1e5 || p.delay_ps.min < 0.0 {
                    return Err(Error::input(
                        format!("{pp}.delay_ps"),
                        format!("expected delays from 0 to 1e5 ps, got [{}, {}]", p.delay_ps.min, p.delay_ps.max),
                    ));
                }
                let db = self.delay_bounds(k);
                if db.max < db.min {
                    return Err(Error::input(
                        format!("{pp}.delay_ps"),
                        format!("no feasible delay: bounds [{}, {}] ps with min_separation_ps = {} ps", p.delay_ps.min, p.delay_ps.max, self.min_separation_ps),
                    ));
                }
            }
        }
        if let Some(b) = self.max_total_fluence_jcm2 {
            require_positive(&join(path, "max_total_fluence_jcm2"), b, "J/cm²")?;
            let least: f64 = (0..self.pulses.len())
                .map(|k| {
                    let p = Pulse {
                        center_ps: 0.0,
                        fwhm_fs: self.pulses[k].fwhm_fs.min,
                        peak_intensity_wcm2: self.intensity_bounds(k).min,
                        shape: self.shape,
                        rise_fs: self.rise_fs,
                        // The least fluence: the earliest switch-off.
                        cut_fs: (self.shape == PulseShape::Truncated).then_some(self.pulses[k].cut_fs.min),
                        polarization: Default::default(),
                    };
                    fluence_jcm2(&p)
                })
                .sum();
            if least > b {
                return Err(Error::input(
                    join(path, "max_total_fluence_jcm2"),
                    format!("no feasible design: the smallest allowed pulses already need {least:.3e} J/cm² > {b:.3e} J/cm²"),
                ));
            }
        }
        Ok(())
    }
}

/// Fluence-time integral ∫I dt of a pulse in J/cm² (on axis).
pub fn fluence_jcm2(p: &Pulse) -> f64 {
    p.peak_intensity_wcm2 * p.envelope_area_ps() * 1e-12
}

/// How hard the search tries: the size of each swarm, how many independent starts it may run and how
/// long each polish lasts. Every level stops early once three starts agree.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Effort {
    /// Small swarms, two to four starts: a first look.
    Quick,
    #[default]
    /// The default: sized so that 1–4 pulse designs of linear molecules reach the best known design.
    Normal,
    /// Larger swarms, up to sixteen starts.
    Thorough,
}

impl Effort {
    /// The level of a name as written in objective files.
    pub fn parse(name: &str) -> Option<Effort> {
        match name {
            "quick" => Some(Effort::Quick),
            "normal" => Some(Effort::Normal),
            "thorough" => Some(Effort::Thorough),
            _ => None,
        }
    }

    /// Name as written in objective files.
    pub fn name(&self) -> &'static str {
        match self {
            Effort::Quick => "quick",
            Effort::Normal => "normal",
            Effort::Thorough => "thorough",
        }
    }
}

/// Settings of the search as the objective gives them (every number optional: the effort level
/// chooses what is not given).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SearchSettings {
    /// Seed of every random choice; the same file and seed give the same design.
    pub seed: u64,
    /// Effort level.
    pub effort: Effort,
    /// Particles in each swarm.
    pub swarm_size: Option<usize>,
    /// Swarm iterations per start.
    pub iterations: Option<usize>,
    /// A fixed number of independent starts (no early stop on agreement).
    pub starts: Option<usize>,
    /// Most starts the search may run before it gives up on agreement.
    pub max_starts: Option<usize>,
    /// Distinct trains refined with the full solver.
    pub refine_candidates: Option<usize>,
    /// Nelder–Mead iterations of each polish and each full-solver refinement.
    pub refine_iterations: Option<usize>,
    /// Starts whose scores differ by less than this agree (units of the observable).
    pub agreement: f64,
    /// Wall-clock budget, s: no new start begins after it (at least the effort's minimum starts run).
    pub time_limit_s: Option<f64>,
}

impl Default for SearchSettings {
    fn default() -> Self {
        SearchSettings {
            seed: 1,
            effort: Effort::Normal,
            swarm_size: None,
            iterations: None,
            starts: None,
            max_starts: None,
            refine_candidates: None,
            refine_iterations: None,
            agreement: 2e-3,
            time_limit_s: None,
        }
    }
}

/// The numbers one search runs with, resolved from the settings for a space of a given dimension.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SearchPlan {
    /// Effort level the plan came from.
    pub effort: Effort,
    /// Random trains scored to pick each swarm's first population (with the seeds).
    pub sample: usize,
    /// Particles per swarm.
    pub swarm_size: usize,
    /// Swarm iterations.
    pub iterations: usize,
    /// Starts run before agreement is checked.
    pub min_starts: usize,
    /// Most starts.
    pub max_starts: usize,
    /// Stop as soon as three starts agree.
    pub stop_on_agreement: bool,
    /// Sweeps of the exhaustive line search after each swarm (kick model; 0 for none).
    pub line_sweeps: usize,
    /// Nelder–Mead iterations of each start's polish (split-kick model).
    pub polish_iterations: usize,
    /// Distinct trains refined with the full solver.
    pub refine_candidates: usize,
    /// Nelder–Mead iterations of each full-solver refinement.
    pub refine_iterations: usize,
    /// Agreement tolerance.
    pub agreement: f64,
}

impl SearchSettings {
    /// The plan for a space with `dims` free parameters; `full_screening` when every evaluation is a
    /// full-solver run (pulses too long for the kick model), which keeps swarms and starts small.
    pub fn plan(&self, dims: usize, full_screening: bool) -> SearchPlan {
        let d = dims;
        // (random sample, swarm, iterations, min starts, max starts, polish, refine candidates, refine iterations)
        let (sample, swarm, iterations, min_starts, max_starts, polish, candidates, refine) = match (self.effort, full_screening) {
            (Effort::Quick, false) => (100 * d, 8 + 4 * d, 10 + 4 * d, 2, 4, 20 + 10 * d, 1, 6 + 3 * d),
            (Effort::Normal, false) => (300 * d, 10 + 6 * d, 15 + 6 * d, 3, 8, 40 + 20 * d, 2, 8 + 4 * d),
            (Effort::Thorough, false) => (1000 * d, 16 + 8 * d, 25 + 10 * d, 5, 16, 80 + 30 * d, 3, 15 + 6 * d),
            (Effort::Quick, true) => (0, 6 + d, 6 + d, 1, 2, 5 + 2 * d, 1, 0),
            (Effort::Normal, true) => (0, 8 + 2 * d, 8 + 2 * d, 2, 3, 10 + 4 * d, 1, 0),
            (Effort::Thorough, true) => (0, 10 + 3 * d, 12 + 3 * d, 3, 6, 20 + 6 * d, 1, 0),
        };
        let (min_starts, max_starts, stop_on_agreement) = match self.starts {
            Some(n) => (n, n, false),
            None => {
                let max = self.max_starts.unwrap_or(max_starts);
                (min_starts.min(max), max, true)
            }
        };
        SearchPlan {
            effort: self.effort,
            sample,
            swarm_size: self.swarm_size.unwrap_or(swarm),
            iterations: self.iterations.unwrap_or(iterations),
            min_starts,
            max_starts,
            stop_on_agreement,
            line_sweeps: match self.effort {
                Effort::Quick => 2,
                Effort::Normal => 4,
                Effort::Thorough => 8,
            },
            polish_iterations: self.refine_iterations.unwrap_or(polish),
            refine_candidates: self.refine_candidates.unwrap_or(candidates),
            refine_iterations: self.refine_iterations.unwrap_or(refine),
            agreement: self.agreement,
        }
    }

    /// The smaller plan of the single-pulse baseline: two quick starts.
    pub fn baseline_plan(&self, dims: usize, full_screening: bool) -> SearchPlan {
        let p = SearchSettings { effort: Effort::Quick, ..*self }.plan(dims, full_screening);
        SearchPlan { min_starts: 1, max_starts: if full_screening { 1 } else { 2 }, stop_on_agreement: false, ..p }
    }
}

/// A complete design problem: base scenario, design space, goal and search settings.
#[derive(Debug, Clone, PartialEq)]
pub struct Objective {
    /// What this objective demonstrates.
    pub description: Option<String>,
    /// Molecule, temperature and solver settings (its pulses are replaced by each design).
    pub base: Scenario,
    /// The pulse trains searched.
    pub space: DesignSpace,
    /// With "max_count", the search also decides how many pulses (1..=max) are worth firing.
    pub variable_count: bool,
    /// What to achieve.
    pub goal: Goal,
    /// How to search.
    pub search: SearchSettings,
    /// Robust design: the full-solver stage maximizes the mean score over this many samples of these
    /// errors (the same samples for every candidate), instead of the nominal score.
    pub robust: Option<(crate::tolerance::Noise, usize)>,
}

impl Objective {
    /// Apply a caller's overrides of the search settings (the command line's --seed, --effort and
    /// --time-limit, the Python module's keywords): seed, effort ("quick", "normal" or "thorough") and
    /// time limit in seconds. Errors name the option.
    pub fn override_search(&mut self, seed: Option<u64>, effort: Option<&str>, time_limit_s: Option<f64>) -> Result<()> {
        if let Some(s) = seed {
            self.search.seed = s;
        }
        if let Some(e) = effort {
            self.search.effort = Effort::parse(e).ok_or_else(|| Error::input("--effort", format!("expected quick, normal or thorough, got \"{e}\"")))?;
        }
        if let Some(t) = time_limit_s {
            if !(t > 0.0 && t <= 1e7) {
                return Err(Error::input("--time-limit", format!("expected a time above 0 and at most 1e7 s, got {t}")));
            }
            self.search.time_limit_s = Some(t);
        }
        Ok(())
    }

    /// Read an objective from JSON text (`file` names the source in syntax errors).
    pub fn from_json_str(text: &str, file: &str) -> Result<Objective> {
        let v = parse_json(text, file)?;
        Objective::from_value(&v)
    }

    /// Read an objective from a parsed JSON value.
    pub fn from_value(v: &Value) -> Result<Objective> {
        crate::input::objective_file::objective(v)
    }

    /// Check what no single part of the objective can check alone: the goal against the fields, and
    /// that the longest, strongest design fits the basis and replays as a scenario.
    pub fn validate(&self) -> Result<()> {
        let (obj, goal) = (self, &self.goal);
        if goal.window_ps.1 > 1e5 {
            let key = if matches!(goal.kind, GoalKind::ValueAt(_)) { "goal.at_ps" } else { "goal.window_ps" };
            return Err(Error::input(key, format!("expected goal times up to 1e5 ps after the last pulse, got {:e} ps", goal.window_ps.1)));
        }
        if goal.observable == Observable::Cos && obj.space.static_field_kv_cm.is_none() && obj.space.two_colour.is_none() && obj.space.terahertz.is_none() {
            return Err(Error::input("goal.observable", "⟨cosθ⟩ needs an orienting field: give static_field_kv_cm, pulses.two_colour or terahertz"));
        }
        goal.check_rotor(obj.molecule(), "goal")?;
        let along_z = |p: &PulseBounds| {
            p.angle_deg.is_fixed()
                && p.ellipticity.is_fixed()
                && crate::field::PulsePolarization { angle_deg: p.angle_deg.min, ellipticity: p.ellipticity.min }.is_along_z()
        };
        let polarized = !obj.space.pulses.iter().all(along_z);
        let tilted = obj.space.static_field_angle_deg.is_some_and(|b| !b.is_fixed() || b.min.to_radians().sin().abs() > 1e-12);
        if goal.observable == Observable::CosX && !(tilted && obj.space.static_field_kv_cm.is_some()) {
            return Err(Error::input(
                "goal.observable",
                "⟨cosθ_X⟩ needs a static field tilted towards X: give static_field_kv_cm and a static_field_angle_deg that is not 0 or 180",
            ));
        }
        if goal.observable == Observable::ThreeAxisOriented && !((polarized || tilted) && obj.space.static_field_kv_cm.is_some()) {
            return Err(Error::input(
                "goal.observable",
                "three-axis orientation needs a static field together with pulses polarized away from Z or a tilted static field (static_field_kv_cm with pulses.angle_deg or static_field_angle_deg)",
            ));
        }
        if (polarized || tilted) && (obj.space.two_colour.is_some() || obj.space.terahertz.is_some()) {
            return Err(Error::input(
                if polarized { "pulses.polarization" } else { "static_field_angle_deg" },
                "pulses polarized away from Z or a tilted static field cannot yet be combined with two-colour or terahertz pulses",
            ));
        }
        if (polarized || tilted) && obj.space.static_field_kv_cm.is_some() && goal.observable.needs_cos2_2d() {
            return Err(Error::input(
                "goal.observable",
                "⟨cos²θ_2D⟩ is not computed yet in a static field that is tilted or joined by pulses polarized away from Z; expected cos2 or cos",
            ));
        }
        // The longest design must replay as a valid scenario: check before any search starts.
        let longest = obj.space.field(&vec![1.0; obj.space.dims()]);
        // The strongest design must fit the largest basis the solver allows: its kick strength when the
        // kick model screens candidates, else (long pulses) the reach the full solver allows for.
        let molecule = obj.molecule();
        let screening = obj.kick_screening();
        let reach = |p: &Pulse| {
            if screening { p.kick_strength(molecule.delta_alpha_a3()).abs() } else { crate::simulate::reach_strength(molecule, p) }
        };
        let strongest: f64 = longest.pulses.iter().map(reach).sum::<f64>()
            + longest
                .two_colour
                .iter()
                .map(|t| reach(&Pulse { peak_intensity_wcm2: t.fundamental_intensity_wcm2 + t.second_harmonic_intensity_wcm2, ..t.envelope_pulse() }))
                .sum::<f64>();
        let room = obj.molecule().max_physical_j() as f64 * 0.6;
        if strongest > room {
            return Err(Error::input(
                "max_peak_intensity_wcm2",
                format!(
                    "the strongest allowed train has total kick strength {strongest:.3e}, more than the largest basis can hold (about {room:.0}); expected a lower ceiling"
                ),
            ));
        }
        obj.scenario_for(&longest).validate().map_err(|e| match e {
            Error::Input { field, message } => Error::input("goal", format!("the design would not replay as a scenario ({field}: {message})")),
            other => other,
        })?;
        Ok(())
    }

    /// Whether the kick (impulsive) model screens candidates before the full solver: only when every
    /// pulse of the longest allowed design lasts less than a quarter of the fastest rotational period
    /// 1/(2 A c) (sudden limit, pulse ≪ rotational period; common practice). Longer pulses, up to the
    /// adiabatic regime, are searched with the full solver throughout.
    pub fn kick_screening(&self) -> bool {
        let m = self.molecule();
        let fastest_cm = m.as_top().map(|t| t.a_cm).unwrap_or(m.revival_b_cm());
        let period_ps = crate::units::revival_period_ps(fastest_cm);
        let longest = self.space.field(&vec![1.0; self.space.dims()]);
        let widest = longest.pulses.iter().map(|p| p.fwhm_ps()).chain(longest.two_colour.iter().map(|t| t.fwhm_fs / 1000.0)).fold(0.0, f64::max);
        widest < KICK_SCREENING_FRACTION * period_ps
    }

    /// The scenario that replays a design: the base with the design's pulses and a window that shows
    /// the pulses and the goal window.
    pub fn scenario_for(&self, field: &FieldModel) -> Scenario {
        let t_last = field.last_center_ps();
        let widest = field.pulses.iter().map(|p| p.fwhm_ps()).chain(field.two_colour.iter().map(|t| t.fwhm_fs / 1000.0)).fold(0.0, f64::max);
        let start = -(2.0 * widest).max(0.2);
        let stop = t_last
            + self.goal.window_ps.1.max(match self.goal.kind {
                GoalKind::ValueAt(t) => t,
                _ => 0.0,
            })
            + 0.1 * self.goal.window_ps.1.abs().max(0.5);
        let mut s = self.base.clone();
        // The design is reported with the full solver, never the kick model.
        if s.solver.method == crate::scenario::Method::Kick {
            s.solver.method = crate::scenario::Method::Auto;
        }
        s.description = self.description.clone().map(|d| format!("Design: {d}"));
        s.field = field.clone();
        // At most ~1e5 samples in the replayed trace.
        let step_fs = self.goal.step_fs.min(50.0).max((stop - start) * 1000.0 / 1e5);
        s.window = Window { start_ps: start, stop_ps: stop, step_fs };
        s
    }

    /// The molecule.
    pub fn molecule(&self) -> &Molecule {
        &self.base.molecule
    }

    /// Solver settings of the base scenario.
    pub fn solver_settings(&self) -> SolverSettings {
        self.base.solver
    }

    /// How the molecule was named (for writing designs back).
    pub fn molecule_source(&self) -> &MoleculeSource {
        &self.base.molecule_source
    }
}

/// Lower every pulse's intensity bound so that the ADK estimate of the fraction ionized per pulse stays
/// below `limit` (judged at the longest allowed duration, the worst case).
pub(crate) fn apply_ionization_limit(space: &mut DesignSpace, mol: &Molecule, limit: f64) -> Result<()> {
    if !(limit > 0.0 && limit < 1.0) {
        return Err(Error::input("max_ionized_fraction", format!("expected a fraction between 0 and 1, got {limit}")));
    }
    let ip = mol
        .ionization_energy_ev
        .ok_or_else(|| Error::input("molecule.ionization_energy_ev", format!("max_ionized_fraction needs the ionization energy of {} (eV)", mol.name)))?;
    let mut largest_cap: f64 = 0.0;
    for (k, pb) in space.pulses.iter_mut().enumerate() {
        let pulse = |i: f64| Pulse {
            center_ps: 0.0,
            fwhm_fs: pb.fwhm_fs.max,
            peak_intensity_wcm2: i,
            shape: space.shape,
            rise_fs: space.rise_fs,
            cut_fs: (space.shape == PulseShape::Truncated).then_some(pb.cut_fs.max),
            polarization: Default::default(),
        };
        let cap = crate::optics::ionization::intensity_for_fraction(pulse, ip, limit);
        if cap < pb.peak_intensity_wcm2.min {
            return Err(Error::input(
                format!("pulses.each[{k}].peak_intensity_wcm2"),
                format!(
                    "no feasible intensity: the minimum {:e} W/cm² already ionizes more than {limit} (limit ≈ {cap:.3e} W/cm²)",
                    pb.peak_intensity_wcm2.min
                ),
            ));
        }
        pb.peak_intensity_wcm2.max = pb.peak_intensity_wcm2.max.min(cap);
        largest_cap = largest_cap.max(cap);
    }
    // The ceiling itself (used by the single-pulse baseline too) follows the ionization limit.
    space.max_peak_intensity_wcm2 = space.max_peak_intensity_wcm2.min(largest_cap);
    Ok(())
}
