//! Scoring a goal on a run: the one place that decides which series a goal reads, whether it needs
//! ⟨cos²θ_2D⟩, and how a peak, minimum or mean is refined from the field-free coherences.

use crate::design::Objective;
use crate::design::search::DesignResult;
use crate::error::Result;
use crate::field::FieldModel;
use crate::goal::{Goal, GoalKind, Observable, Score};
use crate::observe::{FreeSums, Trace};
use crate::optics::focal::FocalAverage;
use crate::scenario::Scenario;
use crate::simulate::{RunProgress, Simulation, Solver};
use std::sync::Arc;

/// The series of `trace` that `observable` reads (None when the run did not compute it).
pub fn series(observable: Observable, trace: &Trace) -> Option<&[f64]> {
    match observable {
        Observable::Cos2 => Some(&trace.cos2),
        Observable::Cos2TwoD => trace.cos2_2d(),
        Observable::Cos => trace.cos(),
        Observable::CosX => trace.lab_cos(crate::basis::lab::LabAxis::X),
        Observable::ThreeAxis => trace.three_axis(),
        Observable::ThreeAxisOriented => trace.three_axis_oriented(),
    }
}

/// Score a goal from a trace sampled at `goal.times(t_last)` and the ensemble's coherence sums after
/// the last pulse. Peaks and minima found on the grid are refined by golden-section search on the
/// exact field-free expression where it applies; means use the exact time average when the window is
/// field-free.
pub fn score_goal(goal: &Goal, trace: &Trace, after: &FreeSums, t_last: f64) -> Score {
    let Some(series) = series(goal.observable, trace).filter(|s| !s.is_empty()) else {
        // No samples, or ⟨cosθ⟩ (⟨cosθ_X⟩) of a run without any field orienting along Z (X): zero by symmetry.
        return Score { value: 0.0, t_ps: trace.times_ps.first().copied() };
    };
    let pick = |r: (f64, f64)| if goal.observable == Observable::Cos2 { r.0 } else { r.1 };
    // Level sums hold ⟨cos²θ⟩ and ⟨|cosθ|⟩ only: refine orientation goals on the samples alone.
    let field_free = match goal.observable {
        Observable::Cos | Observable::CosX | Observable::ThreeAxisOriented => f64::INFINITY,
        // The minimum of two averages has no exact mean from the sums: means use the samples.
        Observable::ThreeAxis if goal.kind == GoalKind::Mean => f64::INFINITY,
        Observable::ThreeAxis if !after.carries_three_axis() => f64::INFINITY,
        _ => after.t0_ps(),
    };
    match goal.kind {
        GoalKind::ValueAt(_) => Score { value: series[0], t_ps: Some(trace.times_ps[0]) },
        GoalKind::Mean => {
            let (a, b) = (t_last + goal.window_ps.0, t_last + goal.window_ps.1);
            if a >= field_free {
                Score { value: pick(after.mean_over(a, b)), t_ps: None }
            } else {
                // Trapezoid over the samples (the window starts during a pulse).
                let n = series.len();
                let mut s = 0.0;
                for i in 1..n {
                    s += 0.5 * (series[i] + series[i - 1]) * (trace.times_ps[i] - trace.times_ps[i - 1]);
                }
                Score { value: s / (trace.times_ps[n - 1] - trace.times_ps[0]), t_ps: None }
            }
        }
        GoalKind::Peak | GoalKind::Minimum => {
            let sense = goal.sense();
            let mut best = 0;
            for i in 0..series.len() {
                if sense * series[i] > sense * series[best] {
                    best = i;
                }
            }
            let t_best = trace.times_ps[best];
            let dt = if series.len() > 1 { trace.times_ps[1] - trace.times_ps[0] } else { 0.0 };
            let lo = (t_best - dt).max(trace.times_ps[0]);
            let hi = (t_best + dt).min(*trace.times_ps.last().expect("samples"));
            let mut score = Score { value: series[best], t_ps: Some(t_best) };
            if dt > 0.0 && lo >= field_free {
                let f =
                    |t: f64| sense * if goal.observable == Observable::ThreeAxis { after.eval_three_axis(t).unwrap_or(f64::NAN) } else { pick(after.eval(t)) };
                // ⟨cos²θ⟩ of a linear molecule: Newton steps on the exact derivatives (a few passes);
                // elsewhere, or if Newton leaves the bracket, golden-section search.
                let newton = match (after, goal.observable) {
                    (FreeSums::Levels(l), Observable::Cos2) => crate::numeric::newton_max(|t| l.cos2_derivatives(t), sense, t_best, lo, hi),
                    _ => None,
                };
                let (t_opt, v) = newton.unwrap_or_else(|| crate::numeric::golden_max(f, lo, hi, 1e-5));
                if v > sense * score.value {
                    score = Score { value: sense * v, t_ps: Some(t_opt) };
                }
            }
            score
        }
    }
}

/// Run `field` on `solver` at the goal's sample times (the goal window after `t_last`, the centre of the
/// last pulse of the nominal train), averaged over the focal volume when `focal` is given, and score
/// `goal` on it. The designer scores every train this way, and a replayed design file is scored the
/// same way, so the two agree.
pub fn score_run(solver: &Solver, field: &FieldModel, goal: &Goal, t_last: f64, focal: Option<&FocalAverage>) -> Result<Score> {
    let times = goal.times(t_last);
    let run = match focal {
        None => solver.run_for_goal(field, &times, goal.observable)?,
        Some(avg) => solver.run_focal(field, &times, goal.observable.needs_cos2_2d(), avg)?,
    };
    Ok(score_goal(goal, &run.trace, &run.final_sums, t_last))
}

/// Simulate `scenario` (see [`crate::simulate::simulate`]) and score its goal, if it has one, as the
/// designer scores it ([`score_run`]); progress goes to `progress`.
pub fn simulate_scored(scenario: &Scenario, progress: Arc<RunProgress>) -> Result<Simulation> {
    let started = std::time::Instant::now();
    let solver = crate::simulate::solver_for(scenario, progress)?;
    let mut sim = crate::simulate::simulate_with(scenario, &solver)?;
    if let Some(goal) = &scenario.goal {
        sim.goal_score = Some(score_run(&solver, &scenario.field, goal, scenario.last_pulse_center_ps(), scenario.focal_average.as_ref())?);
    }
    sim.run_time_s = started.elapsed().as_secs_f64();
    Ok(sim)
}

/// A design replayed through the simulation, for its report: the design file's scenario (goal set,
/// window shifted so that the optimum falls on a sample), its simulation with the goal scored, and the
/// best single pulse's simulation as the baseline.
pub struct Replay {
    /// The scenario a design file holds.
    pub scenario: Scenario,
    /// Its simulation, goal scored.
    pub design: Simulation,
    /// The best single pulse's simulation.
    pub baseline: Simulation,
}

/// Replay the best train of `r` and its single-pulse baseline (see [`Replay`]).
pub fn replay(obj: &Objective, r: &DesignResult) -> Result<Replay> {
    let mut scenario = obj.scenario_for(&r.best.field);
    scenario.goal = Some(obj.goal);
    // Put the time of the optimum on the output grid so the trace shows the reported value.
    if let Some(t) = r.best.full.t_ps {
        let step = scenario.window.step_fs / 1000.0;
        let k = ((t - scenario.window.start_ps) / step).ceil();
        scenario.window.start_ps = t - k * step;
    }
    let design = simulate_scored(&scenario, Arc::default())?;
    let mut base_scenario = scenario.clone();
    base_scenario.field = r.baseline.field.clone();
    base_scenario.goal = None;
    let baseline = crate::simulate::simulate(&base_scenario)?;
    Ok(Replay { scenario, design, baseline })
}
