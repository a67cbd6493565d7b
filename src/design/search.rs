//! The search: independent starts, each a seeded particle swarm on the kick model and a Nelder–Mead
//! polish on the split-kick model, run until the best starts agree; then the full time-dependent solver
//! scores every start and refines the best. Pulses too long for the kick model (see
//! [`Objective::kick_screening`]) are searched with the full solver throughout. Every random choice
//! comes from the objective's seed, and every recorded quantity is independent of thread timing.
//!
//! Three models of the same physics, from cheap to exact:
//! - the kick model: every pulse an exact kick exp(iP cos²θ) at its centre (~10⁴ trains/s, batched);
//! - the split-kick model: every pulse three kicks at the nodes of its envelope's three-point Gauss rule
//!   with exact free evolution between them (about three times the cost; within ~1e-3 of the full solver
//!   for 50 fs pulses on N2 at 300 K, where the kick model is off by ~2e-2);
//! - the full solver: the time-dependent Schrödinger equation through every envelope.

use super::{Bounds, DesignSpace, Effort, Objective, PulseBounds, Score, SearchPlan};
use crate::error::{Error, Result};
use crate::field::FieldModel;
use crate::observe::{FreeSums, Trace};
use crate::scenario::{Method, SolverSettings};
use crate::shard::Shard;
use crate::simulate::Solver;
use argmin::core::{CostFunction, Executor, KV, Problem, SendAlias, State, SyncAlias, TerminationReason, TerminationStatus};
use argmin::solver::neldermead::NelderMead;
use argmin::solver::particleswarm::{Particle, ParticleSwarm};
use rand::{Rng, SeedableRng};
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
    /// The search of `count` pulses finished (its design is final).
    fn count_finished(&self, _count: usize) {}
}

/// A monitor that shows nothing and never interrupts.
pub struct Silent;
impl Monitor for Silent {}

/// One design with its scores.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Candidate {
    /// The pulse train.
    pub field: FieldModel,
    /// Score in the kick (impulsive) model; None when the pulses are too long for it.
    pub kick: Option<Score>,
    /// Score with the full time-dependent solver (the reported result).
    pub full: Score,
}

/// What one independent start found.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct StartOutcome {
    /// Best value of its swarm (kick model, or the full solver for long pulses).
    pub swarm: f64,
    /// Value after the polish (split-kick model, or the full solver for long pulses).
    pub polished: f64,
    /// Full-solver value of the polished train.
    pub full: f64,
    /// Evaluations the start used (swarm and polish).
    pub evaluations: usize,
}

/// How sure the search is of one pulse count's design.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Confidence {
    /// Every start, in the order run.
    pub starts: Vec<StartOutcome>,
    /// Starts whose full-solver value is within `agreement` of the best start's.
    pub agreeing: usize,
    /// Best minus worst full-solver value over the starts (in the goal's sense).
    pub spread: f64,
    /// The agreement tolerance used.
    pub agreement: f64,
    /// Why no more starts were run: "agreement", "start limit", "time limit" or "interrupted".
    pub stopped_by: String,
    /// A plain warning when fewer than three starts agree (None otherwise).
    pub warning: Option<String>,
}

/// The starts that must agree before the search trusts its answer.
pub const STARTS_THAT_MUST_AGREE: usize = 3;

/// The full-solver refinement ends once d + 1 Nelder–Mead iterations in a row gained less than this
/// fraction of the agreement figure (2e-5 with the default 0.002). Measured on nitrogen at 300 K (five
/// 50 fs pulses at 8e13 W/cm²): the whole refinement gained 5e-6 over the polished train in 107
/// full-solver evaluations, three quarters of the design's time.
const REFINE_STALL: f64 = 0.01;

/// One point of the convergence history.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
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
    /// How sure the search is, per entry of `per_count`.
    pub confidence: Vec<Confidence>,
    /// Kick-model and split-kick evaluations.
    pub kick_evaluations: usize,
    /// Full-solver evaluations.
    pub full_evaluations: usize,
    /// Best value versus evaluations.
    pub history: Vec<HistoryPoint>,
    /// True if the user stopped the search early.
    pub interrupted: bool,
    /// True if the time limit ended the search before the starts agreed.
    pub time_limited: bool,
    /// Wall-clock time, s.
    pub run_time_s: f64,
}

impl DesignResult {
    /// The confidence report of the chosen design.
    pub fn best_confidence(&self) -> Option<&Confidence> {
        self.per_count.iter().position(|c| c == &self.best).and_then(|i| self.confidence.get(i))
    }
}

/// A train with more pulses wins "up to N" only if it beats the fewer-pulse design by more than this
/// (absolute, in units of the observable).
pub const COUNT_GAIN_THRESHOLD: f64 = 2e-3;

/// Which of the three models scores a train.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Model {
    Kick,
    SplitKick,
    Full,
}

/// The three solvers a search scores trains with, built once per molecule, temperature and solver
/// settings; searches that share them (the ceilings of a limits map) share their cached operators.
pub struct SearchSolvers {
    /// The kick model; None when the objective's pulses are too long for it.
    kick: Option<Solver>,
    /// The split-kick model (None with `kick`).
    split: Option<Solver>,
    full: Solver,
}

impl SearchSolvers {
    /// The solvers for `obj`: they depend on its molecule, temperature, solver settings and on whether
    /// its longest pulse is short enough for the kick model, not on intensities or the goal.
    pub fn new(obj: &Objective) -> Result<SearchSolvers> {
        let base = obj.solver_settings();
        // The kick models screen candidates: a looser thermal cut and basis edge (1e-4, 1e-6) keep their
        // scores within 2e-5 of the converged kick model on nitrogen at 300 K (four random pulses,
        // measured against cuts of 1e-8 and 1e-10) and halve the work. The full solver keeps the
        // user's tolerances.
        let screening = SolverSettings {
            method: Method::Kick,
            thermal_tolerance: base.thermal_tolerance.max(1e-4),
            edge_tolerance: base.edge_tolerance.max(1e-6),
            kick_terahertz_as_finite: true,
            kick_nodes: 1,
            ..base
        };
        let (kick, split) = if obj.kick_screening() {
            (
                Some(Solver::new(obj.molecule(), obj.base.temperature_k, screening)?),
                Some(Solver::new(obj.molecule(), obj.base.temperature_k, SolverSettings { kick_nodes: 3, ..screening })?),
            )
        } else {
            (None, None)
        };
        let full_method = if base.method == Method::Kick { Method::Auto } else { base.method };
        let full = Solver::new(obj.molecule(), obj.base.temperature_k, SolverSettings { method: full_method, ..base })?;
        Ok(SearchSolvers { kick, split, full })
    }
}

/// Evaluations done in the current stage, from the running totals a [`Monitor`] is given: what a
/// progress display shows (the command line's bar, the Python module's callback).
#[derive(Debug, Default)]
pub struct StageCounter {
    /// Evaluations before the stage's first (None until it has one).
    start: Mutex<Option<usize>>,
}

impl StageCounter {
    /// A new stage begins ([`Monitor::stage`]).
    pub fn restart(&self) {
        *self.start.lock().expect("lock") = None;
    }

    /// Evaluations done in this stage after `evaluations` in all ([`Monitor::evaluated`]).
    pub fn done(&self, evaluations: usize) -> usize {
        let mut start = self.start.lock().expect("lock");
        evaluations - *start.get_or_insert(evaluations.saturating_sub(1))
    }
}

/// Scores trains with the three solvers and keeps the counts, the best point and the history.
struct Evaluator<'a> {
    obj: &'a Objective,
    /// The kick model; None when the objective's pulses are too long for it.
    kick: Option<&'a Solver>,
    /// The split-kick model (None with `kick`).
    split: Option<&'a Solver>,
    full: &'a Solver,
    with_2d: bool,
    kick_count: AtomicUsize,
    full_count: AtomicUsize,
    /// Best (value, train) seen by the screening models and by the full solver.
    best: Mutex<[Option<(f64, FieldModel)>; 2]>,
    /// Best value within the current stage (reset when a stage starts).
    stage_best: Mutex<Option<f64>>,
    history: Mutex<Vec<HistoryPoint>>,
    stage: Mutex<String>,
    monitor: &'a dyn Monitor,
    /// When `search.time_limit_s` runs out (None: no limit).
    deadline: Option<Instant>,
}

impl<'a> Evaluator<'a> {
    fn new(obj: &'a Objective, solvers: &'a SearchSolvers, monitor: &'a dyn Monitor) -> Evaluator<'a> {
        let SearchSolvers { kick, split, full } = solvers;
        let (kick, split) = (kick.as_ref(), split.as_ref());
        Evaluator {
            obj,
            kick,
            split,
            full,
            with_2d: obj.goal.observable.needs_cos2_2d(),
            kick_count: AtomicUsize::new(0),
            full_count: AtomicUsize::new(0),
            best: Mutex::new([None, None]),
            stage_best: Mutex::new(None),
            history: Mutex::new(vec![]),
            stage: Mutex::new(String::new()),
            monitor,
            deadline: obj.search.time_limit_s.map(|t| Instant::now() + std::time::Duration::from_secs_f64(t)),
        }
    }

    /// Close the current stage's curve at its last evaluation (once; the next stage starts a new one).
    fn close_stage(&self) {
        let mut sb = self.stage_best.lock().expect("lock");
        if let Some(v) = *sb {
            let stage = self.stage.lock().expect("lock").clone();
            self.history.lock().expect("lock").push(HistoryPoint { evaluation: self.evaluations(), stage, best: v });
        }
        *sb = None;
    }

    /// Count a start that ran elsewhere (in a part of a sharded design) as if it had run here: its
    /// evaluations, and its history numbered on from the evaluations so far.
    fn replay_start(&self, run: &StartRun) {
        let before = self.evaluations();
        self.kick_count.fetch_add(run.kick_evaluations, Ordering::Relaxed);
        self.full_count.fetch_add(run.full_evaluations, Ordering::Relaxed);
        let mut history = self.history.lock().expect("lock");
        history.extend(run.history.iter().map(|h| HistoryPoint { evaluation: h.evaluation + before, ..h.clone() }));
    }

    /// True once `search.time_limit_s` has passed (the line searches then stop too).
    fn past_deadline(&self) -> bool {
        self.deadline.is_some_and(|d| Instant::now() > d)
    }

    /// The solver of a model, or an error naming the pulse duration when the pulses are too long for
    /// the kick models.
    fn solver(&self, model: Model) -> Result<&Solver> {
        let s = match model {
            Model::Full => return Ok(self.full),
            Model::Kick => self.kick,
            Model::SplitKick => self.split,
        };
        s.ok_or_else(|| {
            Error::input(
                "pulses.fwhm_fs",
                format!(
                    "pulses this long (from {:.0}% of the fastest rotational period) are not impulsive; the kick model does not apply, use the full solver",
                    100.0 * super::KICK_SCREENING_FRACTION
                ),
            )
        })
    }

    /// The model that screens (kick, or full for long pulses) and the one that polishes.
    fn screening_models(&self) -> (Model, Model) {
        if self.kick.is_some() { (Model::Kick, Model::SplitKick) } else { (Model::Full, Model::Full) }
    }

    fn evaluations(&self) -> usize {
        self.kick_count.load(Ordering::Relaxed) + self.full_count.load(Ordering::Relaxed)
    }

    /// Score a train with `model`, recording progress.
    fn score(&self, field: &FieldModel, model: Model) -> Result<Score> {
        let s = self.compute(field, model)?;
        self.record(field, model, s);
        Ok(s)
    }

    /// Score a train without touching the best-so-far or the history (only the counts).
    fn score_quietly(&self, field: &FieldModel, model: Model) -> Result<Score> {
        let s = self.compute(field, model)?;
        self.counter(model).fetch_add(1, Ordering::Relaxed);
        Ok(s)
    }

    fn counter(&self, model: Model) -> &AtomicUsize {
        if model == Model::Full { &self.full_count } else { &self.kick_count }
    }

    /// The goal value of one train with `model`.
    fn compute(&self, field: &FieldModel, model: Model) -> Result<Score> {
        let goal = &self.obj.goal;
        let t_last = field.last_center_ps();
        let solver = self.solver(model)?;
        let one = |f: &FieldModel| super::score::score_run(solver, f, goal, t_last, self.obj.base.focal_average.as_ref());
        match (&self.obj.robust, model) {
            // Robust design: the mean over fixed error samples (common random numbers), probe at nominal times.
            (Some((noise, n)), Model::Full) => {
                let values: Vec<f64> =
                    (0..*n).map(|i| one(&crate::tolerance::perturb(field, *noise, self.obj.search.seed, i)).map(|s| s.value)).collect::<Result<_>>()?;
                Ok(Score { value: values.iter().sum::<f64>() / *n as f64, t_ps: one(field)?.t_ps })
            }
            _ => one(field),
        }
    }

    /// Count one evaluation and keep the best design, the stage's best and the history up to date.
    /// Called in a fixed order (never from parallel workers), so the history is reproducible.
    fn record(&self, field: &FieldModel, model: Model, s: Score) {
        let goal = &self.obj.goal;
        self.counter(model).fetch_add(1, Ordering::Relaxed);
        let n = self.evaluations();
        let mut best = self.best.lock().expect("lock");
        let slot = &mut best[usize::from(model == Model::Full)];
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

    /// Scores of many trains with a kick model, batched through [`Solver::kick_batch`] where the trains
    /// allow it (the rest one by one, in parallel); recorded in input order. Focal averages run as extra
    /// trains with scaled intensities.
    fn score_kick_many(&self, fields: &[FieldModel], model: Model) -> Result<Vec<Score>> {
        use rayon::prelude::*;
        let goal = &self.obj.goal;
        let solver = self.solver(model)?;
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
        let sums = solver.kick_batch(&expanded, self.with_2d)?;
        let per = nodes.len();
        let scores: Vec<Score> = fields
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
                        let (mut cos2, mut cos2_2d) = (vec![0.0; times.len()], vec![0.0; times.len()]);
                        total.eval_series(&times, |k, (a, b)| {
                            cos2[k] = a;
                            cos2_2d[k] = b;
                        });
                        let trace = Trace { times_ps: times.clone(), cos2, cos2_2d: self.with_2d.then_some(cos2_2d), ..Default::default() };
                        Some(super::score::score_goal(goal, &trace, &FreeSums::Levels(total), t_last))
                    }
                    _ => None,
                };
                match batched {
                    Some(s) => Ok(s),
                    None => self.compute(f, model),
                }
            })
            .collect::<Result<_>>()?;
        for (f, s) in fields.iter().zip(&scores) {
            self.record(f, model, *s);
        }
        Ok(scores)
    }

    fn set_stage(&self, name: &str, planned: usize) {
        self.close_stage();
        *self.stage.lock().expect("lock") = name.to_string();
        self.monitor.stage(name, planned);
    }
}

/// The argmin problem: a point of the search space → minus the goal value (argmin minimizes).
struct Cost<'a, 'b> {
    ev: &'b Evaluator<'a>,
    space: &'b DesignSpace,
    model: Model,
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
        let s = self.ev.score(&field, self.model).map_err(argmin::core::Error::new)?;
        Ok(-self.ev.obj.goal.sense() * s.value)
    }

    /// A swarm's particles: kick-model trains run as one batch (see `Solver::kick_batch`), full-solver
    /// trains in parallel; recorded in particle order either way.
    fn bulk_cost<P>(&self, params: &[P]) -> std::result::Result<Vec<f64>, argmin::core::Error>
    where
        P: std::borrow::Borrow<Vec<f64>> + SyncAlias,
        f64: SendAlias,
        Self: SyncAlias,
    {
        use rayon::prelude::*;
        if self.ev.monitor.interrupted() {
            return Ok(vec![f64::INFINITY; params.len()]);
        }
        let fields: Vec<FieldModel> = params.iter().map(|p| self.space.field(&self.unit(p.borrow()))).collect();
        let scores = if self.model == Model::Full {
            let s: Vec<Score> = fields.par_iter().map(|f| self.ev.compute(f, Model::Full)).collect::<Result<_>>().map_err(argmin::core::Error::new)?;
            for (f, x) in fields.iter().zip(&s) {
                self.ev.record(f, Model::Full, *x);
            }
            s
        } else {
            self.ev.score_kick_many(&fields, self.model).map_err(argmin::core::Error::new)?
        };
        Ok(scores.iter().map(|s| -self.ev.obj.goal.sense() * s.value).collect())
    }
}

/// Wraps an argmin solver so that a user interrupt ends it after the current iteration.
struct Interruptible<'m, S> {
    inner: S,
    monitor: &'m dyn Monitor,
    /// The search's time limit: iterations end once it passed.
    deadline: Option<Instant>,
    /// Ends the run once it stopped paying (None: run to the iteration limit).
    stall: Option<Stall>,
}

/// A run has stalled when its best cost improved by less than `gain` over the last `window` iterations.
struct Stall {
    window: usize,
    gain: f64,
    /// Best cost after each iteration so far.
    best: Vec<f64>,
}

impl Stall {
    fn new(window: usize, gain: f64) -> Stall {
        Stall { window: window.max(1), gain, best: vec![] }
    }

    /// Record the best cost after an iteration; true once the last `window` iterations gained less than `gain`.
    fn stalled(&mut self, best: f64) -> bool {
        self.best.push(best);
        let n = self.best.len();
        n > self.window && self.best[n - 1 - self.window] - best < self.gain
    }
}

impl<'m, O, I: State<Float = f64>, S: argmin::core::Solver<O, I>> argmin::core::Solver<O, I> for Interruptible<'m, S> {
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
        if self.monitor.interrupted() || self.deadline.is_some_and(|d| Instant::now() > d) {
            return TerminationStatus::Terminated(TerminationReason::Interrupt);
        }
        if self.stall.as_mut().is_some_and(|s| s.stalled(state.get_best_cost())) {
            return TerminationStatus::Terminated(TerminationReason::SolverConverged);
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

/// Particle swarm in the unit cube from a given first population with its costs; returns (best point,
/// best cost).
fn swarm(
    ev: &Evaluator,
    space: &DesignSpace,
    rng: &mut rand::rngs::StdRng,
    first: Vec<(Vec<f64>, f64)>,
    iterations: usize,
    model: Model,
) -> Result<(Vec<f64>, f64)> {
    let d = space.dims();
    let cost = Cost { ev, space, model, periodic: false };
    let particles: Vec<Particle<Vec<f64>, f64>> =
        first.into_iter().map(|(p, c)| Particle::new(p, c, (0..d).map(|_| rng.random_range(-0.2..0.2)).collect())).collect();
    let size = particles.len();
    let pso = ParticleSwarm::new((vec![0.0; d], vec![1.0; d]), size).with_rng_generator(rand::rngs::StdRng::seed_from_u64(rng.random()));
    let res = Executor::new(cost, Interruptible { inner: pso, monitor: ev.monitor, deadline: ev.deadline, stall: None })
        .configure(|s| s.population(particles).max_iters(iterations as u64))
        .run()
        .map_err(argmin_error)?;
    let st = res.state();
    let best = st.get_best_param().map(|p| p.position.clone()).unwrap_or_else(|| vec![0.5; d]);
    Ok((best.iter().map(|x| x.clamp(0.0, 1.0)).collect(), st.get_best_cost()))
}

/// Nelder–Mead from a unit-cube point, in the periodic parameterization, for at most `iterations`
/// iterations or until it stalls (`stall`); returns (best point, best cost).
fn simplex(ev: &Evaluator, space: &DesignSpace, start: &[f64], model: Model, iterations: usize, step: f64, stall: Option<Stall>) -> Result<(Vec<f64>, f64)> {
    let y0: Vec<f64> = start.iter().map(|u| (2.0 * u.clamp(0.0, 1.0) - 1.0).asin()).collect();
    let cost = Cost { ev, space, model, periodic: true };
    if iterations == 0 || y0.is_empty() {
        let c = cost.cost(&y0).map_err(argmin_error)?;
        return Ok((start.to_vec(), c));
    }
    let mut points = vec![y0.clone()];
    for i in 0..y0.len() {
        let mut y = y0.clone();
        y[i] += if y[i] > 1.0 { -step } else { step };
        points.push(y);
    }
    let nm = NelderMead::new(points).with_sd_tolerance(1e-10).map_err(argmin_error)?;
    let res = Executor::new(cost, Interruptible { inner: nm, monitor: ev.monitor, deadline: ev.deadline, stall })
        .configure(|s| s.max_iters(iterations as u64))
        .run()
        .map_err(argmin_error)?;
    let st = res.state();
    let y = st.get_best_param().cloned().unwrap_or(y0);
    Ok((y.iter().map(|v| 0.5 * (1.0 + v.sin())).collect(), st.get_best_cost()))
}

/// Largest coordinate difference of two unit-cube points.
fn distance(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max)
}

/// Cyclic exhaustive line search: each free parameter in turn is scanned over its whole range on the
/// grid of `DesignSpace::line_points` (one batch per line) and moved to the best point, until a sweep
/// gains less than 1e-7 or `sweeps` sweeps are done. Revival features are narrow and isolated along each
/// delay, which a swarm alone finds only by luck. Returns (point, cost).
fn line_sweeps(ev: &Evaluator, space: &DesignSpace, start: Vec<f64>, start_cost: f64, model: Model, sweeps: usize) -> Result<(Vec<f64>, f64)> {
    let lines = space.line_points();
    let cost = Cost { ev, space, model, periodic: false };
    let (mut u, mut c) = (start, start_cost);
    for _ in 0..sweeps {
        let before = c;
        for (i, &n) in lines.iter().enumerate() {
            if ev.monitor.interrupted() || ev.past_deadline() {
                return Ok((u, c));
            }
            let points: Vec<Vec<f64>> = (0..=n)
                .map(|j| {
                    let mut p = u.clone();
                    p[i] = j as f64 / n as f64;
                    p
                })
                .collect();
            let costs = cost.bulk_cost(&points).map_err(argmin_error)?;
            // The lowest cost; ties keep the current point.
            if let Some((j, &cj)) = costs.iter().enumerate().min_by(|a, b| a.1.total_cmp(b.1).then(a.0.cmp(&b.0)))
                && cj < c
            {
                u = points[j].clone();
                c = cj;
            }
        }
        if before - c < 1e-7 {
            break;
        }
    }
    Ok((u, c))
}

/// The first population of a start: every seed and `sample` random points are scored together (one
/// batch), and the best `size` of them that lie apart from each other (0.01 in every coordinate) become
/// the swarm. Returns (point, cost) pairs.
fn first_population(
    ev: &Evaluator,
    space: &DesignSpace,
    model: Model,
    seeds: &[Vec<f64>],
    size: usize,
    sample: usize,
    rng: &mut rand::rngs::StdRng,
) -> Result<Vec<(Vec<f64>, f64)>> {
    let dims = space.dims();
    let mut points: Vec<Vec<f64>> = seeds.to_vec();
    points.extend((0..sample.max(size)).map(|_| (0..dims).map(|_| rng.random::<f64>()).collect::<Vec<f64>>()));
    let cost = Cost { ev, space, model, periodic: false };
    let costs = cost.bulk_cost(&points).map_err(argmin_error)?;
    let mut order: Vec<usize> = (0..points.len()).collect();
    order.sort_by(|&a, &b| costs[a].total_cmp(&costs[b]).then(a.cmp(&b)));
    let mut out: Vec<(Vec<f64>, f64)> = vec![];
    for &i in &order {
        if out.len() == size {
            break;
        }
        if out.iter().all(|(p, _)| distance(p, &points[i]) > 0.01) {
            out.push((points[i].clone(), costs[i]));
        }
    }
    // Too few distinct points (a tiny space): fill with the rest in order.
    for &i in &order {
        if out.len() == size {
            break;
        }
        if !out.iter().any(|(p, _)| p == &points[i]) {
            out.push((points[i].clone(), costs[i]));
        }
    }
    Ok(out)
}

/// What one start of a search found: its polished train (unit-cube point), the swarm's and the polish's
/// values, its evaluations and its history, numbered from the start's first evaluation. Starts are
/// independent of each other (each draws from its own random stream), so a part of a sharded design
/// runs some of them and a merge puts them back in order.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct StartRun {
    /// Which start (from 0).
    pub index: usize,
    /// The polished train, as a point of the unit cube of the design space.
    pub point: Vec<f64>,
    /// Best value of the swarm (screening model).
    pub swarm: f64,
    /// Value of `point` in the polish model.
    pub polished: f64,
    /// Kick-model and split-kick evaluations of this start.
    pub kick_evaluations: usize,
    /// Full-solver evaluations of this start (pulses too long for the kick model).
    pub full_evaluations: usize,
    /// Where the stages' best values rose, evaluations counted from the start's first.
    pub history: Vec<HistoryPoint>,
}

/// The random stream of start `index` of a search seeded with `seed` (SplitMix64 of the pair, so that
/// neighbouring seeds and starts get unrelated streams).
fn start_rng(seed: u64, index: usize) -> rand::rngs::StdRng {
    let mut z = seed ^ (index as u64 + 1).wrapping_mul(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    rand::rngs::StdRng::seed_from_u64(z ^ (z >> 31))
}

/// The stopping rule of the starts: after `min_starts`, three within `agreement` of the best (polish model).
fn starts_agree(runs: &[StartRun], plan: &SearchPlan, sense: f64) -> bool {
    if runs.len() < plan.min_starts || !plan.stop_on_agreement {
        return false;
    }
    let best = runs.iter().map(|r| sense * r.polished).fold(f64::NEG_INFINITY, f64::max);
    runs.iter().filter(|r| sense * r.polished >= best - plan.agreement).count() >= STARTS_THAT_MUST_AGREE
}

/// Which starts a search runs: all of them in order until they agree, the starts a part of a sharded
/// design owns (each to its end, no early stop), or starts that parts ran, replayed in order.
#[derive(Clone, Copy)]
enum Starts<'a> {
    Search,
    Part(Shard),
    Given(&'a [StartRun]),
}

/// Search one design space (fixed pulse count). `previous` is the best design with one pulse fewer.
fn search_space(
    ev: &Evaluator,
    space: &DesignSpace,
    label: &str,
    seed: u64,
    plan: &SearchPlan,
    previous: Option<&FieldModel>,
    deadline: Option<Instant>,
) -> Result<(Candidate, Confidence)> {
    let (runs, stopped_by) = run_starts(ev, space, label, seed, plan, previous, deadline, Starts::Search)?;
    finish_space(ev, space, label, plan, &runs, stopped_by)
}

/// Stage one of a search: the starts, each a swarm, a line search and a polish. Returns the starts
/// that ran, in order, and why no more ran.
#[allow(clippy::too_many_arguments)]
fn run_starts(
    ev: &Evaluator,
    space: &DesignSpace,
    label: &str,
    seed: u64,
    plan: &SearchPlan,
    previous: Option<&FieldModel>,
    deadline: Option<Instant>,
    which: Starts,
) -> Result<(Vec<StartRun>, String)> {
    let obj = ev.obj;
    let sense = obj.goal.sense();
    let (screen, polish) = ev.screening_models();
    let dims = space.dims();
    if dims == 0 {
        let run = StartRun { index: 0, point: vec![], swarm: f64::NAN, polished: f64::NAN, kick_evaluations: 0, full_evaluations: 0, history: vec![] };
        return Ok((vec![run], "nothing to search".into()));
    }
    let mut runs: Vec<StartRun> = vec![];
    if let Starts::Given(given) = which {
        for run in given.iter().take(plan.max_starts) {
            ev.replay_start(run);
            runs.push(run.clone());
            if starts_agree(&runs, plan, sense) {
                return Ok((runs, "agreement".into()));
            }
        }
        if runs.is_empty() {
            return Err(Error::input("parts", "the parts hold no start; expected at least one"));
        }
        return Ok((runs, "start limit".into()));
    }
    let mut stopped_by = "start limit".to_string();
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let rest: Vec<f64> = (0..dims).map(|_| rng.random::<f64>()).collect();
    let seeds = match ev.solver(screen) {
        Ok(s) if screen != Model::Full => super::seeds::seed_pool(obj, space, s, previous, &rest).all(),
        _ => vec![],
    };
    for s in 0..plan.max_starts {
        if let Starts::Part(shard) = which
            && !shard.owns(s)
        {
            continue;
        }
        if ev.monitor.interrupted() {
            stopped_by = "interrupted".into();
            break;
        }
        // Past the time limit no start begins (at least one has run: it ended at its limit too).
        if !runs.is_empty() && deadline.is_some_and(|d| Instant::now() > d) {
            stopped_by = "time limit".into();
            break;
        }
        let mut rng = start_rng(seed, s);
        let (kick_before, full_before) = (ev.kick_count.load(Ordering::Relaxed), ev.full_count.load(Ordering::Relaxed));
        let before = kick_before + full_before;
        let history_before = ev.history.lock().expect("lock").len();
        let model_name = if screen == Model::Full { "full" } else { "kick" };
        ev.set_stage(&format!("{label} · start {} · {model_name} swarm", s + 1), plan.sample + seeds.len() + plan.swarm_size * plan.iterations);
        let first = first_population(ev, space, screen, &seeds, plan.swarm_size, plan.sample, &mut rng)?;
        let (u, c) = swarm(ev, space, &mut rng, first, plan.iterations, screen)?;
        let (u, c) = if screen == Model::Full || plan.line_sweeps == 0 {
            (u, c)
        } else {
            ev.set_stage(&format!("{label} · start {} · kick line search", s + 1), space.line_points().iter().sum::<usize>() * 2);
            line_sweeps(ev, space, u, c, screen, plan.line_sweeps)?
        };
        let polish_name = if polish == Model::Full { "full" } else { "split-kick" };
        ev.set_stage(&format!("{label} · start {} · {polish_name} simplex", s + 1), plan.polish_iterations * 2);
        let (u2, c2) = if ev.monitor.interrupted() { (u.clone(), c) } else { simplex(ev, space, &u, polish, plan.polish_iterations, 0.2, None)? };
        // The polish model may disagree with the swarm's: keep the polished point when it scores better
        // in the polish model than the swarm's point does.
        let c_u = if polish == screen { c } else { -sense * ev.score_quietly(&space.field(&u), polish)?.value };
        let (point, polished) = if c2 <= c_u { (u2, -sense * c2) } else { (u, -sense * c_u) };
        ev.close_stage();
        let history =
            ev.history.lock().expect("lock")[history_before..].iter().map(|h| HistoryPoint { evaluation: h.evaluation - before, ..h.clone() }).collect();
        runs.push(StartRun {
            index: s,
            point,
            swarm: -sense * c,
            polished,
            kick_evaluations: ev.kick_count.load(Ordering::Relaxed) - kick_before,
            full_evaluations: ev.full_count.load(Ordering::Relaxed) - full_before,
            history,
        });
        // Stop when enough starts agree in the polish model (a part runs every start it owns).
        if matches!(which, Starts::Search) && starts_agree(&runs, plan, sense) {
            stopped_by = "agreement".into();
            break;
        }
    }
    if runs.is_empty() {
        return Err(Error::Interrupted);
    }
    // A start the limit cut short counts as stopped by it.
    if stopped_by != "agreement" && deadline.is_some_and(|d| Instant::now() > d) {
        stopped_by = "time limit".into();
    }
    Ok((runs, stopped_by))
}

/// Stage two of a search: the full solver scores every start's train and refines the best.
fn finish_space(ev: &Evaluator, space: &DesignSpace, label: &str, plan: &SearchPlan, runs: &[StartRun], stopped_by: String) -> Result<(Candidate, Confidence)> {
    let sense = ev.obj.goal.sense();
    let dims = space.dims();
    let polish = ev.screening_models().1;
    // Stage two: the full solver scores every start's train (the same train once), then refines the best.
    ev.set_stage(&format!("{label} · full solver"), runs.len() + plan.refine_iterations * 2);
    let mut full_values: Vec<f64> = vec![];
    let mut scored: Vec<(Vec<f64>, Score)> = vec![];
    for StartRun { point: u, .. } in runs {
        if let Some((_, s)) = scored.iter().find(|(v, _)| distance(v, u) < 1e-12) {
            full_values.push(s.value);
            continue;
        }
        let s = ev.score(&space.field(u), Model::Full)?;
        full_values.push(s.value);
        scored.push((u.clone(), s));
    }
    scored.sort_by(|a, b| (sense * b.1.value).total_cmp(&(sense * a.1.value)));
    let (mut u, mut full) = scored[0].clone();
    if dims > 0 && polish != Model::Full && !ev.monitor.interrupted() {
        // Refine the best few distinct trains in the full solver, from the best down.
        let mut distinct: Vec<&(Vec<f64>, Score)> = vec![];
        for c in &scored {
            if distinct.iter().all(|d| distance(&d.0, &c.0) > 0.01) {
                distinct.push(c);
            }
        }
        for (start, s0) in distinct.into_iter().take(plan.refine_candidates) {
            if ev.monitor.interrupted() {
                break;
            }
            // Only trains that could still win are worth the full solver's time.
            if sense * s0.value < sense * full.value - 2.0 * plan.agreement {
                continue;
            }
            // The refinement only corrects the polish model's small error, so it ends once d + 1
            // iterations in a row gained less than a hundredth of the agreement figure.
            let stall = Stall::new(dims + 1, REFINE_STALL * plan.agreement);
            let (u2, c2) = simplex(ev, space, start, Model::Full, plan.refine_iterations, 0.01, Some(stall))?;
            if c2.is_finite() && -c2 > sense * full.value {
                let s2 = ev.score_quietly(&space.field(&u2), Model::Full)?;
                if sense * s2.value > sense * full.value {
                    u = u2;
                    full = s2;
                }
            }
        }
    }
    let field = space.field(&u);
    let kick = if ev.kick.is_some() { Some(ev.score_quietly(&field, Model::Kick)?) } else { None };
    let outcomes: Vec<StartOutcome> = runs
        .iter()
        .zip(&full_values)
        .map(|(r, f)| StartOutcome { swarm: r.swarm, polished: r.polished, full: *f, evaluations: r.kick_evaluations + r.full_evaluations })
        .collect();
    let best_start = full_values.iter().map(|v| sense * v).fold(f64::NEG_INFINITY, f64::max);
    let worst_start = full_values.iter().map(|v| sense * v).fold(f64::INFINITY, f64::min);
    let agreeing = full_values.iter().filter(|v| sense * **v >= best_start - plan.agreement).count();
    let warning = (dims > 0 && agreeing < STARTS_THAT_MUST_AGREE).then(|| {
        let advice = match (plan.effort, stopped_by.as_str()) {
            (_, "time limit") => "allow more time (--time-limit) or try search.effort \"thorough\"".to_string(),
            (_, "interrupted") => "let the search run to the end".to_string(),
            (Effort::Thorough, _) => "raise search.max_starts or search.swarm_size".to_string(),
            _ => "try search.effort \"thorough\"".to_string(),
        };
        format!("{label}: the search may not have converged: only {agreeing} of {} starts reached this score (within {}); {advice}", runs.len(), plan.agreement)
    });
    let confidence = Confidence { starts: outcomes, agreeing, spread: best_start - worst_start, agreement: plan.agreement, stopped_by, warning };
    Ok((Candidate { field, kick, full }, confidence))
}

/// The designs of every pulse count an objective asks for (1..=N for "max_count", else N), each count's
/// search seeded with the previous count's design, without the single-pulse baseline.
#[derive(Debug, Clone)]
pub struct CountDesigns {
    /// Best design per pulse count, in count order (fewer than asked for when interrupted).
    pub per_count: Vec<Candidate>,
    /// How sure the search is, per entry of `per_count`.
    pub confidence: Vec<Confidence>,
    /// True if the user stopped the search early.
    pub interrupted: bool,
    /// Kick-model and split-kick evaluations.
    pub kick_evaluations: usize,
    /// Full-solver evaluations.
    pub full_evaluations: usize,
    /// Wall-clock time, s.
    pub run_time_s: f64,
}

/// The per-count searches of [`design`] alone (what a map over ceilings and counts needs), scored with
/// `solvers` (built by [`SearchSolvers::new`] for this objective or one differing only in intensities).
pub fn design_counts(obj: &Objective, solvers: &SearchSolvers, monitor: &dyn Monitor) -> Result<CountDesigns> {
    let t0 = Instant::now();
    let ev = Evaluator::new(obj, solvers, monitor);
    let (per_count, confidence, interrupted) = count_searches(&ev, obj, monitor, Starts::Search)?;
    Ok(CountDesigns {
        per_count,
        confidence,
        interrupted: interrupted || monitor.interrupted(),
        kick_evaluations: ev.kick_count.load(Ordering::Relaxed),
        full_evaluations: ev.full_count.load(Ordering::Relaxed),
        run_time_s: t0.elapsed().as_secs_f64(),
    })
}

/// One search per pulse count, in count order; an interrupted search keeps the counts finished (or, when
/// none finished, the best train seen so far). Returns (designs, confidence, interrupted).
/// `which` is [`Starts::Given`] only for a fixed count.
fn count_searches(ev: &Evaluator, obj: &Objective, monitor: &dyn Monitor, which: Starts) -> Result<(Vec<Candidate>, Vec<Confidence>, bool)> {
    let deadline = ev.deadline;
    let n = obj.space.pulses.len();
    let counts: Vec<usize> = if obj.variable_count { (1..=n).collect() } else { vec![n] };
    let mut per_count: Vec<Candidate> = vec![];
    let mut confidence: Vec<Confidence> = vec![];
    let mut interrupted = false;
    let full_screening = ev.kick.is_none();
    for &c in &counts {
        let space = obj.space.truncated(c);
        let plan = obj.search.plan(space.dims(), full_screening);
        let label = if c == 1 { "1 pulse".to_string() } else { format!("{c} pulses") };
        let seed = obj.search.seed.wrapping_add(c as u64 * 7919);
        let searched = run_starts(ev, &space, &label, seed, &plan, per_count.last().map(|p| &p.field), deadline, which)
            .and_then(|(runs, stopped_by)| finish_space(ev, &space, &label, &plan, &runs, stopped_by));
        match searched {
            Ok((cand, conf)) => {
                per_count.push(cand);
                confidence.push(conf);
                monitor.count_finished(c);
            }
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
        // Interrupted before any candidate: fall back to the best train seen so far (screening model,
        // or the full solver when it ran the first stage).
        let seen = { ev.best.lock().expect("lock").iter().flatten().next().cloned() };
        let Some((_, field)) = seen else { return Err(Error::Interrupted) };
        let full = ev.score(&field, Model::Full)?;
        let kick = if ev.kick.is_some() { Some(ev.score(&field, Model::Kick)?) } else { None };
        per_count.push(Candidate { field, kick, full });
        confidence.push(Confidence {
            starts: vec![],
            agreeing: 0,
            spread: 0.0,
            agreement: obj.search.agreement,
            stopped_by: "interrupted".into(),
            warning: Some("the search was interrupted before its first start finished: this is the best train seen, not a converged design".into()),
        });
    }
    Ok((per_count, confidence, interrupted))
}

/// Run the whole design: per pulse count (1..=N for "max_count", else N), plus the single-pulse baseline.
pub fn design(obj: &Objective, monitor: &dyn Monitor) -> Result<DesignResult> {
    design_with(obj, monitor, Starts::Search)
}

/// The starts of a sharded design that one part ran.
#[derive(Debug, Clone)]
pub struct DesignPart {
    /// Every start the part owns that finished, in order.
    pub runs: Vec<StartRun>,
    /// Starts of the whole design (the search's start limit).
    pub max_starts: usize,
    /// False when a signal stopped the part before its last start.
    pub complete: bool,
}

/// The search plan of a sharded design (its start limit is what the parts split), or the reason the
/// objective's design cannot be split into independent starts.
pub fn design_part_plan(obj: &Objective) -> Result<SearchPlan> {
    if obj.variable_count {
        return Err(Error::input(
            "pulses.max_count",
            "a sharded design needs a fixed pulse count (each count starts from the previous count's design); expected pulses.count, one objective per count",
        ));
    }
    if obj.search.time_limit_s.is_some() {
        return Err(Error::input(
            "search.time_limit_s",
            "a sharded design runs whole starts; expected no time limit (the cluster's time limit bounds each task)",
        ));
    }
    let plan = obj.search.plan(obj.space.dims(), !obj.kick_screening());
    if obj.space.dims() == 0 {
        return Err(Error::input("pulses", "nothing to search (every parameter is fixed); expected at least one free parameter for a sharded design"));
    }
    Ok(plan)
}

/// Part `shard` of a sharded design: the first stage (swarm, line search, polish) of the starts
/// i ≡ K (mod N) of the search's start limit, each to its end. [`design_merged`] puts the parts' starts
/// back in order and finishes the design exactly as [`design`] would have (the same starts, stopping
/// rule, full-solver refinement and baseline), so any split gives the unsplit run's design.
pub fn design_part(obj: &Objective, shard: Shard, monitor: &dyn Monitor) -> Result<DesignPart> {
    let plan = design_part_plan(obj)?;
    let solvers = SearchSolvers::new(obj)?;
    let ev = Evaluator::new(obj, &solvers, monitor);
    let n = obj.space.pulses.len();
    let label = if n == 1 { "1 pulse".to_string() } else { format!("{n} pulses") };
    let seed = obj.search.seed.wrapping_add(n as u64 * 7919);
    let runs = match run_starts(&ev, &obj.space, &label, seed, &plan, None, None, Starts::Part(shard)) {
        Ok((runs, _)) => runs,
        Err(Error::Interrupted) => vec![],
        Err(e) => return Err(e),
    };
    let complete = runs.len() == shard.owned(plan.max_starts);
    Ok(DesignPart { runs, max_starts: plan.max_starts, complete })
}

/// The design from the starts of every part ([`design_part`]): `runs` must hold each start
/// 0..max_starts once.
pub fn design_merged(obj: &Objective, runs: &[StartRun], monitor: &dyn Monitor) -> Result<DesignResult> {
    let plan = design_part_plan(obj)?;
    let mut sorted: Vec<StartRun> = runs.to_vec();
    sorted.sort_by_key(|r| r.index);
    if sorted.len() != plan.max_starts || sorted.iter().enumerate().any(|(i, r)| r.index != i) {
        let have: Vec<String> = sorted.iter().map(|r| r.index.to_string()).collect();
        return Err(Error::input("parts", format!("expected starts 0 to {} once each, got [{}]", plan.max_starts.saturating_sub(1), have.join(", "))));
    }
    design_with(obj, monitor, Starts::Given(&sorted))
}

/// [`design`] with its starts run here or given by the parts of a sharded design.
fn design_with(obj: &Objective, monitor: &dyn Monitor, which: Starts) -> Result<DesignResult> {
    let t0 = Instant::now();
    let solvers = SearchSolvers::new(obj)?;
    let ev = Evaluator::new(obj, &solvers, monitor);
    let full_screening = ev.kick.is_none();
    let (per_count, confidence, interrupted) = count_searches(&ev, obj, monitor, which)?;
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
    // With one pulse in the objective's own space (a single pulse, or "max_count" from 1) whose bounds are
    // the baseline's, the design's own one-pulse search, with at least the baseline's plan, is the baseline.
    // (The first pulse's delay bounds are never read: it defines t = 0.)
    let mut one = obj.space.truncated(1);
    one.pulses[0].delay_ps = Bounds::fixed(0.0);
    let own_single = (obj.variable_count || obj.space.pulses.len() == 1) && one == base_space;
    let baseline = if own_single && !per_count.is_empty() {
        per_count[0].clone()
    } else if interrupted || monitor.interrupted() {
        // No time for a search: the single pulse at the ceiling (or at the fluence budget).
        let field = base_space.field(&vec![1.0; base_space.dims()]);
        let kick = if ev.kick.is_some() { Some(ev.score_quietly(&field, Model::Kick)?) } else { None };
        Candidate { kick, full: ev.score_quietly(&field, Model::Full)?, field }
    } else {
        let plan = obj.search.baseline_plan(base_space.dims(), full_screening);
        search_space(&ev, &base_space, "baseline", obj.search.seed.wrapping_add(17), &plan, None, ev.deadline)?.0
    };
    ev.set_stage("done", 0);
    let mut history = ev.history.lock().expect("lock").clone();
    history.sort_by_key(|h| h.evaluation);
    let time_limited = confidence.iter().any(|c| c.stopped_by == "time limit");
    Ok(DesignResult {
        best,
        baseline,
        per_count,
        confidence,
        kick_evaluations: ev.kick_count.load(Ordering::Relaxed),
        full_evaluations: ev.full_count.load(Ordering::Relaxed),
        history,
        interrupted: interrupted || monitor.interrupted(),
        time_limited,
        run_time_s: t0.elapsed().as_secs_f64(),
    })
}

/// Score one train with the kick model and the full solver (as the search would).
pub fn evaluate(obj: &Objective, field: &FieldModel) -> Result<Candidate> {
    let solvers = SearchSolvers::new(obj)?;
    let ev = Evaluator::new(obj, &solvers, &Silent);
    let kick = if ev.kick.is_some() { Some(ev.score(field, Model::Kick)?) } else { None };
    Ok(Candidate { kick, full: ev.score(field, Model::Full)?, field: field.clone() })
}

/// Kick-model score of one train (one evaluation as the search's first stage does it).
pub fn evaluate_kick(obj: &Objective, field: &FieldModel) -> Result<Score> {
    let solvers = SearchSolvers::new(obj)?;
    let ev = Evaluator::new(obj, &solvers, &Silent);
    ev.score(field, Model::Kick)
}

/// Split-kick score of one train (three sub-kicks per pulse, as the search's polish does it).
pub fn evaluate_split_kick(obj: &Objective, field: &FieldModel) -> Result<Score> {
    let solvers = SearchSolvers::new(obj)?;
    let ev = Evaluator::new(obj, &solvers, &Silent);
    ev.score(field, Model::SplitKick)
}

/// Kick-model scores of many trains with one shared solver, as one batch (used by benchmarks and scans).
pub fn evaluate_kick_many(obj: &Objective, fields: &[FieldModel]) -> Result<Vec<Score>> {
    let solvers = SearchSolvers::new(obj)?;
    let ev = Evaluator::new(obj, &solvers, &Silent);
    ev.score_kick_many(fields, Model::Kick)
}

#[cfg(test)]
mod tests {
    use super::{StageCounter, Stall};

    /// A stage's count starts at its first evaluation, whatever the running total, and restarts with
    /// the next stage (exact bookkeeping).
    #[test]
    fn stage_counter_counts_from_the_stage_s_first_evaluation() {
        let c = StageCounter::default();
        assert_eq!(c.done(10), 1);
        assert_eq!(c.done(12), 3);
        c.restart();
        assert_eq!(c.done(12), 1);
        c.restart();
        // The first evaluation of all (total 1) is the stage's first.
        let first = StageCounter::default();
        assert_eq!(first.done(1), 1);
    }

    /// The stall rule compares the best cost with the one `window` iterations earlier (exact bookkeeping,
    /// common practice for ending a local search): never before `window` + 1 iterations, and only when
    /// that gain is below the threshold.
    #[test]
    fn stall_rule_needs_a_whole_window_of_small_gains() {
        let mut s = Stall::new(2, 1e-3);
        assert!(!s.stalled(-0.5));
        assert!(!s.stalled(-0.5));
        // Two iterations after -0.5 the gain is 0.1.
        assert!(!s.stalled(-0.6));
        // Gain over the last two: -0.5 → -0.6005 (0.1005).
        assert!(!s.stalled(-0.6005));
        // -0.6 → -0.6008: 8e-4 < 1e-3.
        assert!(s.stalled(-0.6008));
        // A window of 0 is a window of 1: one iteration without gain stalls.
        let mut one = Stall::new(0, 1e-9);
        assert!(!one.stalled(1.0));
        assert!(one.stalled(1.0));
    }
}
