//! Tolerances: Monte Carlo over timing jitter, pulse-energy noise and two-colour phase noise, scored
//! with the scenario's goal at the nominal probe times.

use crate::design::score::score_goal;
use crate::error::{Error, Result};
use crate::goal::Observable;
use crate::scenario::Scenario;
use crate::shard::Shard;
use crate::simulate::Solver;
use rand::{Rng, SeedableRng};
use rayon::prelude::*;
use serde_json::{Value, json};
use std::sync::atomic::{AtomicBool, Ordering};

/// The errors to sample.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Noise {
    /// RMS timing jitter of each pulse after the first, relative to the first, fs.
    pub jitter_fs: f64,
    /// RMS pulse-energy (intensity) noise, percent.
    pub energy_percent: f64,
    /// RMS two-colour phase noise, rad.
    pub phase_rad: f64,
}

/// Monte Carlo statistics of a design's score.
#[derive(Debug, Clone)]
pub struct ToleranceResult {
    /// Score without errors.
    pub nominal: f64,
    /// Scores of the samples computed, in sampling order.
    pub samples: Vec<f64>,
    /// The draw number of each score in `samples` (0, 1, 2, … unless the run was stopped).
    pub sample_index: Vec<usize>,
    /// Number of samples asked for; more than `samples.len()` when the run was stopped.
    pub requested: usize,
    /// Mean of the samples.
    pub mean: f64,
    /// Standard deviation of the samples.
    pub spread: f64,
    /// The worst-decile score: 10th percentile (90th for a minimum goal).
    pub worst_decile: f64,
}

/// Standard normal deviate (Box–Muller).
fn normal(rng: &mut rand::rngs::StdRng) -> f64 {
    let u1: f64 = rng.random_range(f64::EPSILON..1.0);
    let u2: f64 = rng.random::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

/// Sample `i` of the random errors applied to a train (reproducible from `seed` and `i`): jitter of
/// every pulse after the first, energy noise on every pulse, phase noise on two-colour pulses.
pub fn perturb(field: &crate::field::FieldModel, noise: Noise, seed: u64, i: usize) -> crate::field::FieldModel {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15).wrapping_add(i as u64));
    let mut f = field.clone();
    for (k, p) in f.pulses.iter_mut().enumerate() {
        if k > 0 {
            p.center_ps += noise.jitter_fs / 1000.0 * normal(&mut rng);
        }
        p.peak_intensity_wcm2 = (p.peak_intensity_wcm2 * (1.0 + noise.energy_percent / 100.0 * normal(&mut rng))).max(0.0);
    }
    for (k, t) in f.two_colour.iter_mut().enumerate() {
        if k > 0 {
            t.center_ps += noise.jitter_fs / 1000.0 * normal(&mut rng);
        }
        let g = (1.0 + noise.energy_percent / 100.0 * normal(&mut rng)).max(0.0);
        t.fundamental_intensity_wcm2 *= g;
        t.second_harmonic_intensity_wcm2 *= g;
        t.phase_rad += noise.phase_rad * normal(&mut rng);
    }
    f
}

/// Evaluate `scenario`'s goal under `samples` random draws of `noise` (reproducible with `seed`). Once
/// `stop` is set no new sample starts, and the statistics cover the samples finished.
pub fn tolerance(scenario: &Scenario, noise: Noise, samples: usize, seed: u64, stop: &AtomicBool) -> Result<ToleranceResult> {
    tolerance_part(scenario, noise, samples, seed, None, stop)
}

/// [`tolerance`] for the draws one part owns (all of them without `shard`): the others are not computed,
/// and the statistics cover the part's draws (see [`ToleranceResult::merge`] for the whole run).
pub fn tolerance_part(scenario: &Scenario, noise: Noise, samples: usize, seed: u64, shard: Option<Shard>, stop: &AtomicBool) -> Result<ToleranceResult> {
    let goal = scenario.goal.ok_or_else(|| Error::input("goal", "a tolerance analysis needs a goal in the scenario (design.json files carry one)"))?;
    for (name, v) in [("jitter_fs", noise.jitter_fs), ("energy_percent", noise.energy_percent), ("phase_rad", noise.phase_rad)] {
        if !v.is_finite() || v < 0.0 {
            return Err(Error::input(name, format!("expected a finite RMS value ≥ 0, got {v}")));
        }
    }
    if noise.energy_percent > 50.0 {
        return Err(Error::input("energy_percent", "expected at most 50 % RMS energy noise"));
    }
    if !(1..=100_000).contains(&samples) {
        return Err(Error::input("samples", format!("expected 1 to 100000 samples, got {samples}")));
    }
    let solver = Solver::new(&scenario.molecule, scenario.temperature_k, scenario.solver)?;
    let per_sample = solver.time_steps(&scenario.field).0;
    let limit = crate::scan::COMMAND_STEP_FACTOR * scenario.solver.max_steps;
    if per_sample * (samples + 1) as f64 > limit {
        return Err(Error::input(
            "samples",
            format!(
                "{samples} samples of {per_sample:.2e} time steps each exceed {} × solver.max_steps = {limit:.0e}; use fewer samples, the kick model, or --allow-long",
                crate::scan::COMMAND_STEP_FACTOR
            ),
        ));
    }
    // The probe times stay where the nominal design puts them.
    let t_last = scenario.last_pulse_center_ps();
    let times = goal.times(t_last);
    let with_2d = goal.observable != Observable::Cos2;
    let score = |field: &crate::field::FieldModel| -> Result<f64> {
        let run = match &scenario.focal_average {
            None => solver.run(field, &times, with_2d)?,
            Some(a) => solver.run_focal(field, &times, with_2d, a)?,
        };
        Ok(score_goal(&goal, &run.trace, &run.final_sums, t_last).value)
    };
    let nominal = score(&scenario.field)?;
    let owned: Vec<usize> = (0..samples).filter(|&i| shard.is_none_or(|s| s.owns(i))).collect();
    let fields: Vec<crate::field::FieldModel> = owned.iter().map(|&i| perturb(&scenario.field, noise, seed, i)).collect();
    let scored: Vec<Option<f64>> = fields.par_iter().map(|f| if stop.load(Ordering::SeqCst) { Ok(None) } else { score(f).map(Some) }).collect::<Result<_>>()?;
    let indexed: Vec<(usize, f64)> = owned.iter().zip(&scored).filter_map(|(&i, v)| v.map(|v| (i, v))).collect();
    if owned.is_empty() {
        // A part of more parts than draws may own none: a finished part with no scores.
        return Ok(ToleranceResult {
            nominal,
            samples: vec![],
            sample_index: vec![],
            requested: samples,
            mean: f64::NAN,
            spread: f64::NAN,
            worst_decile: f64::NAN,
        });
    }
    ToleranceResult::from_scores(nominal, samples, indexed, goal.sense())
}

impl ToleranceResult {
    /// The statistics of the scores (draw number, score) in draw order; `sense` is the goal's (+1 for a
    /// maximum). An empty list means the run was stopped before any draw finished.
    pub fn from_scores(nominal: f64, requested: usize, mut indexed: Vec<(usize, f64)>, sense: f64) -> Result<ToleranceResult> {
        indexed.sort_by_key(|x| x.0);
        let (sample_index, values): (Vec<usize>, Vec<f64>) = indexed.into_iter().unzip();
        if values.is_empty() {
            return Err(Error::Interrupted);
        }
        let n = values.len() as f64;
        let mean = values.iter().sum::<f64>() / n;
        let spread = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n).sqrt();
        let mut sorted = values.clone();
        sorted.sort_by(f64::total_cmp);
        let k = ((0.1 * n).floor() as usize).min(sorted.len() - 1);
        let worst_decile = if sense > 0.0 { sorted[k] } else { sorted[sorted.len() - 1 - k] };
        Ok(ToleranceResult { nominal, samples: values, sample_index, requested, mean, spread, worst_decile })
    }

    /// True when every draw `shard` owns finished.
    pub fn part_complete(&self, shard: Shard) -> bool {
        self.samples.len() == shard.owned(self.requested)
    }

    /// The result as a part file holds it (`sense` as in [`ToleranceResult::from_scores`]).
    pub fn part_value(&self, sense: f64) -> Value {
        let scores: Vec<Value> = self.sample_index.iter().zip(&self.samples).map(|(i, v)| json!([i, v])).collect();
        json!({"nominal": self.nominal, "requested": self.requested, "sense": sense, "scores": scores})
    }

    /// One run from the results of its parts: every draw 0..requested from exactly one part, one nominal score.
    pub fn merge(parts: &[Value]) -> Result<ToleranceResult> {
        let bad = |what: &str| Error::input("parts", format!("the parts' tolerance results {what}"));
        let first = parts.first().ok_or_else(|| bad("are empty"))?;
        let (nominal, requested, sense) = (first.get("nominal"), first.get("requested"), first.get("sense"));
        let requested_n = requested.and_then(Value::as_u64).ok_or_else(|| bad("lack the number of draws"))? as usize;
        let mut seen = vec![false; requested_n];
        let mut indexed = vec![];
        for p in parts {
            if p.get("nominal") != nominal || p.get("requested") != requested || p.get("sense") != sense {
                return Err(bad("differ in their nominal score or number of draws"));
            }
            for s in p.get("scores").and_then(Value::as_array).ok_or_else(|| bad("lack their scores"))? {
                let (i, v) = (s.get(0).and_then(Value::as_u64).map(|i| i as usize), s.get(1).and_then(Value::as_f64));
                let (Some(i), Some(v)) = (i, v) else { return Err(bad("hold a score that is not (draw, value)")) };
                if i >= requested_n || seen[i] {
                    return Err(bad(&format!("hold draw {i} twice or out of range")));
                }
                seen[i] = true;
                indexed.push((i, v));
            }
        }
        let nominal = nominal.and_then(Value::as_f64).ok_or_else(|| bad("lack the nominal score"))?;
        ToleranceResult::from_scores(nominal, requested_n, indexed, sense.and_then(Value::as_f64).unwrap_or(1.0))
    }
}
