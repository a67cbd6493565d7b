//! The two-stage search: particle swarm then Nelder–Mead on the cheap kick model, then Nelder–Mead on
//! the full time-dependent solver from the best kick-model candidates. Pulses too long for the kick model
//! (see [`Objective::kick_screening`]) are searched with the full solver in both stages. Every random
//! choice comes from the objective's seed; swarm evaluations run in parallel.

use super::{Bounds, DesignSpace, Objective, PulseBounds, Score};
use crate::error::{Error, Result};
use crate::field::FieldModel;
use crate::observe::{FreeSums, Trace};
use crate::scenario::{Method, SolverSettings};
use crate::simulate::Solver;
use argmin::core::{CostFunction, Executor, KV, Problem, SendAlias, State, SyncAlias, TerminationReason, TerminationStatus};
use argmin::solver::neldermead::NelderMead;
use argmin::solver::particleswarm::ParticleSwarm;
use rand::SeedableRng;
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Instant;

/// Receives progress from a running search and can ask it to stop.
pub trait Monitor: Sync {
    /// A new stage starts with about `planned` objective evaluations.
    fn stage(&self, _name: &str, _planned: usize) {}
    /// `evaluations` done in total; `best` is the best goal value so far (None before the first).
    fn evaluated(&self, _evaluations: usize, _best: Option<f64>) {}
    /// True when the user asked to stop (the search then returns the best design so far).
    fn interrupted(&self) -> bool {
        false
    }
}

/// A monitor that shows nothing and never interrupts.
pub struct Silent;
impl Monitor for Silent {}

/// One design with its scores.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// The pulse train.
    pub field: FieldModel,
    /// Score in the kick (impulsive) model; None when the pulses are too long for it.
    pub kick: Option<Score>,
    /// Score with the full time-dependent solver (the reported result).
    pub full: Score,
}

/// One point of the convergence history.
#[derive(Debug, Clone, PartialEq)]
pub struct HistoryPoint {
    /// Objective evaluations so far (kick and full).
    pub evaluation: usize,
    /// Stage name.
    pub stage: String,
    /// Best goal value found so far in this stage's model.
    pub best: f64,
}

/// The outcome of a design search.
#[derive(Debug, Clone)]
pub struct DesignResult {
    /// The chosen design.
    pub best: Candidate,
    /// The best single pulse under the same ceiling and budget.
    pub baseline: Candidate,
    /// Best design per pulse count (1..=N for "max_count", or only N).
    pub per_count: Vec<Candidate>,
    /// Kick-model evaluations.
    pub kick_evaluations: usize,
    /// Full-solver evaluations.
    pub full_evaluations: usize,
    /// Best value versus evaluations.
    pub history: Vec<HistoryPoint>,
    /// True if the user stopped the search early.
    pub interrupted: bool,
    /// Wall-clock time, s.
    pub run_time_s: f64,
}

/// A train with more pulses wins "up to N" only if it beats the fewer-pulse design by more than this
/// (absolute, in units of the observable).
pub const COUNT_GAIN_THRESHOLD: f64 = 2e-3;

/// Scores trains with one solver and keeps the counts, the best point and the history.
struct Evaluator<'a> {
    obj: &'a Objective,
    /// The kick model; None when the objective's pulses are too long for it.
    kick: Option<Solver>,
    full: Solver,
    with_2d: bool,
    kick_count: AtomicUsize,
    full_count: AtomicUsize,
    best: Mutex<Vec<Option<(f64, FieldModel)>>>,
    /// Best value within the current stage (reset when a stage starts).
    stage_best: Mutex<Option<f64>>,
    history: Mutex<Vec<HistoryPoint>>,
    stage: Mutex<String>,
    monitor: &'a dyn Monitor,
}

impl<'a> Evaluator<'a> {
    fn new(obj: &'a Objective, monitor: &'a dyn Monitor) -> Result<Evaluator<'a>> {
        let base = obj.solver_settings();
        // The kick model screens candidates: a looser thermal cut and basis edge (1e-4, 1e-6) keep its
        // scores within 2e-5 of the converged kick model on nitrogen at 300 K (four random pulses,
        // measured against cuts of 1e-8 and 1e-10) and halve the work. The full solver keeps the
        // user's tolerances.
        let screening = SolverSettings {
            method: Method::Kick,
            thermal_tolerance: base.thermal_tolerance.max(1e-4),
            edge_tolerance: base.edge_tolerance.max(1e-6),
            kick_terahertz_as_finite: true,
            ..base
        };
        let kick = if obj.kick_screening() { Some(Solver::new(obj.molecule(), obj.base.temperature_k, screening)?) } else { None };
        let full_method = if base.method == Method::Kick { Method::Auto } else { base.method };
        let full = Solver::new(obj.molecule(), obj.base.temperature_k, SolverSettings { method: full_method, ..base })?;
        Ok(Evaluator {
            obj,
            kick,
            full,
            with_2d: obj.goal.observable == super::Observable::Cos2TwoD,
            kick_count: AtomicUsize::new(0),
            full_count: AtomicUsize::new(0),
            best: Mutex::new(vec![None, None]),
            stage_best: Mutex::new(None),
            history: Mutex::new(vec![]),
            stage: Mutex::new(String::new()),
            monitor,
        })
    }

    /// The kick model, or an error naming the pulse duration when the pulses are too long for it.
    fn kick_model(&self) -> Result<&Solver> {
        self.kick.as_ref().ok_or_else(|| {
            Error::input(
                "pulses.fwhm_fs",
                format!(
                    "pulses this long (from {:.0}% of the fastest rotational period) are not impulsive; the kick model does not apply, use the full solver",
                    100.0 * super::KICK_SCREENING_FRACTION
                ),
            )
        })
    }

    fn evaluations(&self) -> usize {
        self.kick_count.load(Ordering::Relaxed) + self.full_count.load(Ordering::Relaxed)
    }

    /// Score a train with the kick model (`full` false) or the full solver, recording progress.
    fn score(&self, field: &FieldModel, full: bool) -> Result<Score> {
        self.score_with(field, full, true)
    }

    /// Score a train; `record` false leaves the best-so-far and the history untouched.
    fn score_with(&self, field: &FieldModel, full: bool, record: bool) -> Result<Score> {
        let s = self.compute(field, full)?;
        if record {
            self.record(field, full, s);
        } else {
            let counter = if full { &self.full_count } else { &self.kick_count };
            counter.fetch_add(1, Ordering::Relaxed);
        }
        Ok(s)
    }

    /// The goal value of one train with the kick model (`full` false) or the full solver.
    fn compute(&self, field: &FieldModel, full: bool) -> Result<Score> {
        let goal = &self.obj.goal;
        let t_last = field.last_center_ps();
        let times = goal.times(t_last);
        let solver = if full { &self.full } else { self.kick_model()? };
        let one = |f: &FieldModel| -> Result<Score> {
            let run = match &self.obj.base.focal_average {
                None => solver.run(f, &times, self.with_2d)?,
                Some(avg) => solver.run_focal(f, &times, self.with_2d, avg)?,
            };
            Ok(crate::observe::score_goal(goal, &run.trace, &run.final_sums, t_last))
        };
        match (&self.obj.robust, full) {
            // Robust design: the mean over fixed error samples (common random numbers), probe at nominal times.
            (Some((noise, n)), true) => {
                let values: Vec<f64> =
                    (0..*n).map(|i| one(&crate::tolerance::perturb(field, *noise, self.obj.search.seed, i)).map(|s| s.value)).collect::<Result<_>>()?;
                Ok(Score { value: values.iter().sum::<f64>() / *n as f64, t_ps: one(field)?.t_ps })
            }
            _ => one(field),
        }
    }

    /// Count one evaluation and keep the best design, the stage's best and the history up to date.
    fn record(&self, field: &FieldModel, full: bool, s: Score) {
        let goal = &self.obj.goal;
        let counter = if full { &self.full_count } else { &self.kick_count };
        counter.fetch_add(1, Ordering::Relaxed);
        let n = self.evaluations();
        let mut best = self.best.lock().expect("lock");
        let slot = &mut best[usize::from(full)];
        if slot.as_ref().map(|(v, _)| goal.sense() * s.value > goal.sense() * *v).unwrap_or(true) {
            *slot = Some((s.value, field.clone()));
        }
        let mut sb = self.stage_best.lock().expect("lock");
        if sb.map(|v| goal.sense() * s.value > goal.sense() * v).unwrap_or(true) {
            *sb = Some(s.value);
            let stage = self.stage.lock().expect("lock").clone();
            self.history.lock().expect("lock").push(HistoryPoint { evaluation: n, stage, best: s.value });
        }
        self.monitor.evaluated(n, *sb);
    }

    /// Kick-model scores of many trains, batched through [`Solver::kick_batch`] where the trains allow it
    /// (the rest one by one); each is recorded as by `score`. Focal averages run as extra trains
    /// with scaled intensities.
    fn score_kick_many(&self, fields: &[FieldModel]) -> Result<Vec<Score>> {
        use rayon::prelude::*;
        let goal = &self.obj.goal;
        let nodes: Vec<(f64, f64)> = match &self.obj.base.focal_average {
            None => vec![(1.0, 1.0)],
            Some(avg) => avg.nodes(),
        };
        let expanded: Vec<FieldModel> = fields
            .iter()
            .flat_map(|f| {
                nodes.iter().map(move |&(u, _)| {
                    let mut g = f.clone();
                    g.pulses.iter_mut().for_each(|p| p.peak_intensity_wcm2 *= u);
                    g
                })
            })
            .collect();
        let sums = self.kick_model()?.kick_batch(&expanded, self.with_2d)?;
        let per = nodes.len();
        fields
            .par_iter()
            .enumerate()
            .map(|(i, f)| {
                let t_last = f.last_center_ps();
                let times = goal.times(t_last);
                let parts = &sums[i * per..(i + 1) * per];
                let batched = match parts.iter().map(|p| p.as_ref()).collect::<Option<Vec<_>>>() {
                    Some(ps) if times.first().is_some_and(|&t| t >= ps[0].t0_ps) && ps.iter().all(|p| ps[0].compatible(p)) => {
                        let mut total = ps[0].clone();
                        total.scale(nodes[0].1);
                        for (p, &(_, w)) in ps.iter().zip(&nodes).skip(1) {
                            total.add_scaled(w, p);
                        }
                        let mut trace = Trace { times_ps: times.clone(), cos2: vec![0.0; times.len()], ..Default::default() };
                        if self.with_2d {
                            trace.cos2_2d = vec![0.0; times.len()];
                        }
                        total.eval_series(&times, |k, (a, b)| {
                            trace.cos2[k] = a;
                            if self.with_2d {
                                trace.cos2_2d[k] = b;
                            }
                        });
                        Some(crate::observe::score_goal(goal, &trace, &FreeSums::Levels(total), t_last))
                    }
                    _ => None,
                };
                let s = match batched {
                    Some(s) => s,
                    None => self.compute(f, false)?,
                };
                self.record(f, false, s);
                Ok(s)
            })
            .collect()
    }

    fn set_stage(&self, name: &str, planned: usize) {
        // Close the previous stage's curve at its last evaluation, then start a new one.
        let mut sb = self.stage_best.lock().expect("lock");
        if let Some(v) = *sb {
            let stage = self.stage.lock().expect("lock").clone();
            self.history.lock().expect("lock").push(HistoryPoint { evaluation: self.evaluations(), stage, best: v });
        }
        *sb = None;
        drop(sb);
        *self.stage.lock().expect("lock") = name.to_string();
        self.monitor.stage(name, planned);
    }
}

/// The argmin problem: a point of the search space → minus the goal value (argmin minimizes).
struct Cost<'a, 'b> {
    ev: &'b Evaluator<'a>,
    space: &'b DesignSpace,
    full: bool,
    /// Nelder–Mead works unbounded: u = (1 + sin y)/2 maps R onto [0, 1] smoothly.
    periodic: bool,
}

impl Cost<'_, '_> {
    fn unit(&self, p: &[f64]) -> Vec<f64> {
        if self.periodic { p.iter().map(|y| 0.5 * (1.0 + y.sin())).collect() } else { p.iter().map(|x| x.clamp(0.0, 1.0)).collect() }
    }
}

impl CostFunction for Cost<'_, '_> {
    type Param = Vec<f64>;
    type Output = f64;

    fn cost(&self, p: &Vec<f64>) -> std::result::Result<f64, argmin::core::Error> {
        if self.ev.monitor.interrupted() {
            return Ok(f64::INFINITY);
        }
        let field = self.space.field(&self.unit(p));
        let s = self.ev.score(&field, self.full).map_err(argmin::core::Error::new)?;
        Ok(-self.ev.obj.goal.sense() * s.value)
    }

    /// A swarm's particles: kick-model trains run as one batch (see `Solver::kick_batch`).
    fn bulk_cost<P>(&self, params: &[P]) -> std::result::Result<Vec<f64>, argmin::core::Error>
    where
        P: std::borrow::Borrow<Vec<f64>> + SyncAlias,
        f64: SendAlias,
        Self: SyncAlias,
    {
        use rayon::prelude::*;
        if self.full || self.ev.monitor.interrupted() {
            return params.par_iter().map(|p| self.cost(p.borrow())).collect();
        }
        let fields: Vec<FieldModel> = params.iter().map(|p| self.space.field(&self.unit(p.borrow()))).collect();
        let scores = self.ev.score_kick_many(&fields).map_err(argmin::core::Error::new)?;
        Ok(scores.iter().map(|s| -self.ev.obj.goal.sense() * s.value).collect())
    }
}

/// Wraps an argmin solver so that a user interrupt ends it after the current iteration.
struct Interruptible<'m, S> {
    inner: S,
    monitor: &'m dyn Monitor,
}

impl<'m, O, I: State, S: argmin::core::Solver<O, I>> argmin::core::Solver<O, I> for Interruptible<'m, S> {
    fn name(&self) -> &str {
        self.inner.name()
    }
    fn init(&mut self, problem: &mut Problem<O>, state: I) -> std::result::Result<(I, Option<KV>), argmin::core::Error> {
        self.inner.init(problem, state)
    }
    fn next_iter(&mut self, problem: &mut Problem<O>, state: I) -> std::result::Result<(I, Option<KV>), argmin::core::Error> {
        self.inner.next_iter(problem, state)
    }
    fn terminate(&mut self, state: &I) -> TerminationStatus {
        if self.monitor.interrupted() {
            return TerminationStatus::Terminated(TerminationReason::Interrupt);
        }
        self.inner.terminate(state)
    }
}

/// Recover our own error from argmin's wrapper (the cost function passes it through unchanged).
fn argmin_error(e: argmin::core::Error) -> Error {
    match e.downcast::<Error>() {
        Ok(ours) => ours,
        Err(other) => Error::Numerical(other.to_string()),
    }
}

/// Particle swarm in the unit cube; returns (best point, best cost).
/// `full` scores every particle with the full solver instead of the kick model.
fn swarm(ev: &Evaluator, space: &DesignSpace, seed: u64, size: usize, iterations: usize, full: bool) -> Result<(Vec<f64>, f64)> {
    let d = space.dims();
    let pso = ParticleSwarm::new((vec![0.0; d], vec![1.0; d]), size).with_rng_generator(rand::rngs::StdRng::seed_from_u64(seed));
    let cost = Cost { ev, space, full, periodic: false };
    let res =
        Executor::new(cost, Interruptible { inner: pso, monitor: ev.monitor }).configure(|s| s.max_iters(iterations as u64)).run().map_err(argmin_error)?;
    let st = res.state();
    let best = st.get_best_param().map(|p| p.position.clone()).unwrap_or_else(|| vec![0.5; d]);
    Ok((best.iter().map(|x| x.clamp(0.0, 1.0)).collect(), st.get_best_cost()))
}

/// Nelder–Mead from a unit-cube point, in the periodic parameterization; returns (best point, best cost).
fn simplex(ev: &Evaluator, space: &DesignSpace, start: &[f64], full: bool, iterations: usize) -> Result<(Vec<f64>, f64)> {
    let y0: Vec<f64> = start.iter().map(|u| (2.0 * u.clamp(0.0, 1.0) - 1.0).asin()).collect();
    let cost = Cost { ev, space, full, periodic: true };
    if iterations == 0 || y0.is_empty() {
        let c = cost.cost(&y0).map_err(argmin_error)?;
        return Ok((start.to_vec(), c));
    }
    let mut points = vec![y0.clone()];
    for i in 0..y0.len() {
        let mut y = y0.clone();
        y[i] += if y[i] > 1.0 { -0.35 } else { 0.35 };
        points.push(y);
    }
    let nm = NelderMead::new(points).with_sd_tolerance(1e-9).map_err(argmin_error)?;
    let res =
        Executor::new(cost, Interruptible { inner: nm, monitor: ev.monitor }).configure(|s| s.max_iters(iterations as u64)).run().map_err(argmin_error)?;
    let st = res.state();
    let y = st.get_best_param().cloned().unwrap_or(y0);
    Ok((y.iter().map(|v| 0.5 * (1.0 + v.sin())).collect(), st.get_best_cost()))
}

/// Search one design space (fixed pulse count): kick-model swarm and simplex, then the full solver.
fn search_space(ev: &Evaluator, space: &DesignSpace, label: &str, seed: u64, obj: &Objective, small: bool) -> Result<Candidate> {
    let st = obj.search;
    let (swarm_size, iterations, starts) = if small { (12.min(st.swarm_size), 15.min(st.iterations), 1) } else { (st.swarm_size, st.iterations, st.starts) };
    let sense = obj.goal.sense();
    // Pulses too long for the kick model: both stages run the full solver (`screen_full`).
    let screen_full = ev.kick.is_none();
    let model = if screen_full { "full" } else { "kick" };
    let mut candidates: Vec<(Vec<f64>, f64)> = vec![];
    if space.dims() == 0 {
        candidates.push((vec![], 0.0));
    } else {
        ev.set_stage(&format!("{label} · {model} swarm"), starts * swarm_size * (iterations + 1));
        for s in 0..starts {
            if ev.monitor.interrupted() {
                break;
            }
            let (u, c) = swarm(ev, space, seed.wrapping_mul(1_000_003).wrapping_add(s as u64), swarm_size, iterations, screen_full)?;
            candidates.push((u, c));
        }
        if candidates.is_empty() {
            return Err(Error::Interrupted);
        }
        ev.set_stage(&format!("{label} · {model} simplex"), candidates.len() * st.refine_iterations * 2);
        let mut refined = vec![];
        for (u, c) in &candidates {
            if ev.monitor.interrupted() {
                refined.push((u.clone(), *c));
                continue;
            }
            let (u2, c2) = simplex(ev, space, u, screen_full, st.refine_iterations)?;
            refined.push(if c2 <= *c { (u2, c2) } else { (u.clone(), *c) });
        }
        candidates = refined;
        candidates.sort_by(|a, b| a.1.total_cmp(&b.1));
        let mut distinct: Vec<(Vec<f64>, f64)> = vec![];
        for c in candidates {
            if distinct.iter().all(|d| d.0.iter().zip(&c.0).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max) > 1e-3) {
                distinct.push(c);
            }
        }
        candidates = distinct;
    }
    // Stage two: the full solver scores the best candidates and refines the best of them (after a
    // full-solver first stage, only the best is scored again, for the time of its score).
    let keep = if screen_full { 1 } else { candidates.len().min(st.refine_candidates.max(1)) };
    ev.set_stage(&format!("{label} · full solver"), keep + st.refine_iterations * 2);
    let mut best: Option<(Vec<f64>, Score)> = None;
    for (u, _) in candidates.iter().take(keep) {
        if ev.monitor.interrupted() && best.is_some() {
            break;
        }
        let s = ev.score(&space.field(u), true)?;
        if best.as_ref().map(|b| sense * s.value > sense * b.1.value).unwrap_or(true) {
            best = Some((u.clone(), s));
        }
    }
    let (mut u, mut full) = best.expect("at least one candidate");
    if space.dims() > 0 && !screen_full && !ev.monitor.interrupted() {
        let (u2, c2) = simplex(ev, space, &u, true, if small { st.refine_iterations.min(15) } else { st.refine_iterations })?;
        if c2.is_finite() && -c2 > sense * full.value {
            let s2 = ev.score(&space.field(&u2), true)?;
            if sense * s2.value >= sense * full.value {
                u = u2;
                full = s2;
            }
        }
    }
    let field = space.field(&u);
    let kick = if screen_full { None } else { Some(ev.score_with(&field, false, false)?) };
    Ok(Candidate { field, kick, full })
}

/// Run the whole design: per pulse count (1..=N for "max_count", else N), plus the single-pulse baseline.
pub fn design(obj: &Objective, monitor: &dyn Monitor) -> Result<DesignResult> {
    let t0 = Instant::now();
    let ev = Evaluator::new(obj, monitor)?;
    let n = obj.space.pulses.len();
    let counts: Vec<usize> = if obj.variable_count { (1..=n).collect() } else { vec![n] };
    let mut per_count: Vec<Candidate> = vec![];
    let mut interrupted = false;
    for &c in &counts {
        let space = obj.space.truncated(c);
        match search_space(
            &ev,
            &space,
            &if c == 1 { "1 pulse".to_string() } else { format!("{c} pulses") },
            obj.search.seed.wrapping_add(c as u64 * 7919),
            obj,
            false,
        ) {
            Ok(cand) => per_count.push(cand),
            Err(Error::Interrupted) => {
                interrupted = true;
                break;
            }
            Err(e) => return Err(e),
        }
        if monitor.interrupted() {
            interrupted = true;
            break;
        }
    }
    if per_count.is_empty() {
        // Interrupted before any candidate: fall back to the best train seen so far (kick model, or
        // the full solver when it ran the first stage).
        let seen = { ev.best.lock().expect("lock").iter().flatten().next().cloned() };
        let Some((_, field)) = seen else { return Err(Error::Interrupted) };
        let full = ev.score(&field, true)?;
        let kick = if ev.kick.is_some() { Some(ev.score(&field, false)?) } else { None };
        per_count.push(Candidate { field, kick, full });
    }
    let sense = obj.goal.sense();
    // "Up to N": the fewest pulses whose score is within COUNT_GAIN_THRESHOLD of the best.
    let top = per_count.iter().map(|c| sense * c.full.value).fold(f64::NEG_INFINITY, f64::max);
    let best = per_count.iter().find(|c| sense * c.full.value >= top - COUNT_GAIN_THRESHOLD).cloned().expect("a candidate");
    // Baseline: one pulse, intensity up to the ceiling, the first pulse's duration bounds.
    let base_space = DesignSpace {
        pulses: vec![PulseBounds {
            delay_ps: Bounds::fixed(0.0),
            peak_intensity_wcm2: Bounds { min: 0.0, max: obj.space.max_peak_intensity_wcm2 },
            fwhm_fs: obj.space.pulses[0].fwhm_fs,
            angle_deg: obj.space.pulses[0].angle_deg,
            ellipticity: obj.space.pulses[0].ellipticity,
            cut_fs: obj.space.pulses[0].cut_fs,
        }],
        ..obj.space.clone()
    };
    let baseline = if interrupted || monitor.interrupted() {
        // No time for a search: the single pulse at the ceiling (or at the fluence budget).
        let field = base_space.field(&vec![1.0; base_space.dims()]);
        let kick = if ev.kick.is_some() { Some(ev.score_with(&field, false, false)?) } else { None };
        Candidate { kick, full: ev.score_with(&field, true, false)?, field }
    } else {
        search_space(&ev, &base_space, "baseline", obj.search.seed.wrapping_add(17), obj, true)?
    };
    ev.set_stage("done", 0);
    let mut history = ev.history.lock().expect("lock").clone();
    history.sort_by_key(|h| h.evaluation);
    Ok(DesignResult {
        best,
        baseline,
        per_count,
        kick_evaluations: ev.kick_count.load(Ordering::Relaxed),
        full_evaluations: ev.full_count.load(Ordering::Relaxed),
        history,
        interrupted: interrupted || monitor.interrupted(),
        run_time_s: t0.elapsed().as_secs_f64(),
    })
}

/// Score one train with the kick model and the full solver (as the search would).
pub fn evaluate(obj: &Objective, field: &FieldModel) -> Result<Candidate> {
    let ev = Evaluator::new(obj, &Silent)?;
    let kick = if ev.kick.is_some() { Some(ev.score(field, false)?) } else { None };
    Ok(Candidate { kick, full: ev.score(field, true)?, field: field.clone() })
}

/// Kick-model score of one train (one evaluation as the search's first stage does it).
pub fn evaluate_kick(obj: &Objective, field: &FieldModel) -> Result<Score> {
    let ev = Evaluator::new(obj, &Silent)?;
    ev.score(field, false)
}

/// Kick-model scores of many trains with one shared solver, as one batch (used by benchmarks and scans).
pub fn evaluate_kick_many(obj: &Objective, fields: &[FieldModel]) -> Result<Vec<Score>> {
    let ev = Evaluator::new(obj, &Silent)?;
    ev.score_kick_many(fields)
}
