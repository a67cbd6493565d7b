//! The solver driver: turns a molecule, a temperature and a field model into traces. It builds the
//! schedule (kicks or finite-pulse intervals), runs every (|M|, parity) block in parallel, grows each
//! block's basis until the edge population is below tolerance, and sums the blocks' contributions.

use crate::basis::lab::LabAxis;
use crate::basis::{BOTH_PARITIES, Block, BlockSymmetry};
use crate::ensemble::{BlockPopulation, ThermalEnsemble};
use crate::error::{Error, Result};
use crate::field::FieldModel;
use crate::goal::{Observable, Score};
use crate::molecule::top::BodyAxis;
use crate::molecule::{Molecule, RotorKind};
use crate::observe::{BlockSums, DenseSums, FreeSums, LabAxisSeries, LevelSums, PairParts, ThreeAxisParts, Trace};
use crate::optics::focal::FocalAverage;
use crate::propagate::polar::{POLAR_OBSERVABLES, PolarOps};
use crate::propagate::{BlockOps, BlockState, FreePhases};
use crate::scenario::{Method, Scenario, SolverSettings};
use crate::units::{cm_to_rad_per_ps, coupling_rad_per_ps_per_a3_wcm2};
use driver::{Kernel, LINEAR_STEP, grow_basis};
use nalgebra::DMatrix;
use rayon::prelude::*;

pub mod batch;
pub mod coupling;
pub(crate) mod driver;
pub mod lab_frame;
pub mod oriented_top;
pub(crate) mod tilted;
pub(crate) mod tilted_top;
mod tilted_top_frame;
pub mod tilted_top_pendular;
pub mod top;
use serde::Serialize;
use std::collections::HashMap;
use std::sync::{Arc, Mutex};

/// One step of the field schedule.
#[derive(Debug, Clone, PartialEq)]
pub enum Event {
    /// An impulsive kick exp(i P cos²θ) at time `t_ps` from pulse `pulse`.
    Kick {
        /// Time of the kick, ps.
        t_ps: f64,
        /// Kick strength P (rad).
        strength: f64,
        /// Index of the pulse in the field model.
        pulse: usize,
    },
    /// Time-dependent propagation through the pulses `pulses` from `start_ps` to `end_ps` with steps ≤ `step_ps`.
    Finite {
        /// Start of the interval, ps.
        start_ps: f64,
        /// End of the interval, ps.
        end_ps: f64,
        /// Indices of the pulses active in the interval.
        pulses: Vec<usize>,
        /// Largest time step, ps.
        step_ps: f64,
    },
}

impl Event {
    /// Times inside a finite interval where the envelopes of its pulses in `field` are not smooth (none for a kick).
    pub fn breaks(&self, field: &FieldModel) -> Vec<f64> {
        match self {
            Event::Finite { pulses, .. } => field.breakpoints_of(pulses),
            Event::Kick { .. } => vec![],
        }
    }

    /// (start, end) in ps; equal for a kick.
    pub fn span(&self) -> (f64, f64) {
        match self {
            Event::Kick { t_ps, .. } => (*t_ps, *t_ps),
            Event::Finite { start_ps, end_ps, .. } => (*start_ps, *end_ps),
        }
    }
}

/// What one block used and reached.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct BlockReport {
    /// |M|.
    pub m: u32,
    /// Symmetry of the block (written as "even", "odd", "both" for linear molecules; K or the (Ka, Kc)
    /// parities for tops).
    pub parity: BlockSymmetry,
    /// Highest J in the basis.
    pub j_max: u32,
    /// Number of basis states.
    pub size: usize,
    /// Largest population of any propagated state in the top two J levels, after any pulse.
    pub edge_population: f64,
}

/// The outcome of one run of the solver.
#[derive(Debug, Clone)]
pub struct RunResult {
    /// The sampled observables.
    pub trace: Trace,
    /// Exact time average of ⟨cos²θ⟩ after the last pulse (the permanent alignment).
    pub permanent_cos2: f64,
    /// Exact time average of ⟨cos²θ_2D⟩ after the last pulse (NaN-free: 0 if not computed).
    pub permanent_cos2_2d: f64,
    /// Per-block basis report.
    pub blocks: Vec<BlockReport>,
    /// The schedule that was run.
    pub events: Vec<Event>,
    /// Coherence sums of the ensemble after the last pulse, for evaluation at any later time.
    pub final_sums: FreeSums,
    /// Exact time average of ⟨cosθ⟩ after the last field change (None where it vanishes by symmetry).
    pub permanent_cos: Option<f64>,
}

impl RunResult {
    /// (⟨cos²θ⟩, ⟨cos²θ_2D⟩) at a time t (ps) after the last field interaction.
    pub fn eval_after(&self, t_ps: f64) -> (f64, f64) {
        self.final_sums.eval(t_ps)
    }

    /// Exact time averages of (⟨cos²θ⟩, ⟨cos²θ_2D⟩) over [a, b] (ps), after the last field interaction.
    pub fn mean_after(&self, a_ps: f64, b_ps: f64) -> (f64, f64) {
        self.final_sums.mean_over(a_ps, b_ps)
    }

    /// Time (ps) from which `eval_after` is valid: the end of the last field interaction.
    pub fn field_free_from_ps(&self) -> f64 {
        self.final_sums.t0_ps()
    }
}

/// The three-axis series min(⟨cos²⟩ alignment axis with Z, ⟨cos²⟩ second axis with X) from a top's
/// trace: the X column when pulses were polarized away from Z, else (1 − ⟨cos²⟩ with Z)/2 (symmetric about Z).
fn three_axis_of_averages(top: &crate::molecule::top::Top, axes: &crate::observe::BodyAxes, trace: &Trace) -> Vec<f64> {
    let by_axis = |a: BodyAxis| axes.axis(a);
    let z = by_axis(top.alignment_axis);
    let second = top.second_axis();
    match trace.lab_axis(crate::basis::lab::LabAxis::X, Some(second)) {
        Some(x) => z.iter().zip(x).map(|(a, b)| a.min(*b)).collect(),
        None => z.iter().zip(by_axis(second)).map(|(a, b)| a.min(0.5 * (1.0 - b))).collect(),
    }
}

/// The kicks that replace laser pulse `index` of strength P (polarizability anisotropy `da`, Å³): one
/// at its kick time, or with `nodes` > 1 the sub-kicks at the nodes of `Pulse::quadrature_nodes`, each
/// with its share of P and exact free evolution between them (the split-kick model).
pub(crate) fn pulse_kicks(p: &crate::field::Pulse, index: usize, da: f64, nodes: usize) -> Vec<Event> {
    let strength = p.kick_strength(da);
    p.quadrature_nodes(nodes).into_iter().map(|(t_ps, w)| Event::Kick { t_ps, strength: strength * w, pulse: index }).collect()
}

/// Which of the polar observables (cos²θ, |cosθ|, cosθ, cos³θ) a run computes: every one.
const ALL_POLAR: [bool; POLAR_OBSERVABLES] = [true; POLAR_OBSERVABLES];

/// The polar series of a run, with the ones not computed left empty.
fn polar_series(values: [Vec<f64>; POLAR_OBSERVABLES], wanted: [bool; POLAR_OBSERVABLES]) -> (Vec<f64>, Option<Vec<f64>>, Option<crate::observe::Orientation>) {
    let [cos2, cos2_2d, cos, cos3] = values;
    (cos2, wanted[1].then_some(cos2_2d), wanted[2].then_some(crate::observe::Orientation { cos, cos3: wanted[3].then_some(cos3) }))
}

/// Key of cached block operators: (|M|, parity, size, with ⟨cos²θ_2D⟩).
type OpsKey = (u32, u32, usize, bool);

/// Solver for one molecule at one temperature; reusable across many field models (operators are cached).
pub struct Solver {
    /// The molecule.
    pub molecule: Molecule,
    /// What is propagated: a linear molecule's ensemble or a top.
    rotor: Rotor,
    /// The axis fields symmetric about Z couple to, with the constants of that coupling.
    axis: coupling::CoupledAxis,
    /// Numerical settings.
    pub settings: SolverSettings,
    cache: Mutex<HashMap<OpsKey, Arc<BlockOps>>>,
    /// Operators of the both-parity blocks, keyed by (|M|, size), built once.
    polar_cache: Mutex<HashMap<(u32, usize), Arc<PolarOps>>>,
    /// The all-M solver for fields not symmetric about Z, built on first use.
    lab: std::sync::OnceLock<lab_frame::LabSolver>,
    /// The solver for a linear molecule in a tilted static field (operators cached per block).
    tilted: tilted::TiltedSolver,
    /// Operators of tops in a tilted static field, cached per class and top J.
    tilted_top: tilted_top::TiltedTopCache,
    /// The solver for an asymmetric top in orienting fields (its own frame and blocks), built on first use.
    oriented: std::sync::OnceLock<Result<oriented_top::OrientedTopSolver>>,
    /// Blocks started and finished by this solver's runs (for a progress display).
    pub progress: Arc<RunProgress>,
}

/// What a [`Solver`] propagates.
enum Rotor {
    /// A linear molecule: its thermal ensemble in (|M|, parity of J) blocks.
    Linear(ThermalEnsemble),
    /// A symmetric or asymmetric top: its own ensemble, operators and kernels.
    Top(Box<top::TopSolver>),
}

/// Counts of the independent pieces of work (symmetry blocks, chunks of initial states) that runs have
/// planned and finished; shared by a solver and the views it builds, read by a progress display.
#[derive(Debug, Default)]
pub struct RunProgress {
    planned: std::sync::atomic::AtomicU64,
    finished: std::sync::atomic::AtomicU64,
}

impl RunProgress {
    /// Record `n` more pieces of work.
    pub fn plan(&self, n: usize) {
        self.planned.fetch_add(n as u64, std::sync::atomic::Ordering::Relaxed);
    }

    /// Record one piece finished.
    pub fn finish_one(&self) {
        self.finished.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    }

    /// (finished, planned) so far; planned grows as later runs of one command start.
    pub fn counts(&self) -> (u64, u64) {
        (self.finished.load(std::sync::atomic::Ordering::Relaxed), self.planned.load(std::sync::atomic::Ordering::Relaxed))
    }
}

/// Per-block result before summing.
struct BlockOutcome {
    /// Contributions at sample times inside finite pulses (zero elsewhere; empty if there are none).
    values: Vec<(f64, f64)>,
    /// Field-free stretches with samples: (first sample, end sample, time of ρ, coefficients).
    gaps: Vec<(usize, usize, f64, BlockSums)>,
    /// Coefficients after the last event.
    final_sums: BlockSums,
    report: BlockReport,
}

/// How far (in J) `pulse` can push a linear `molecule` (dimensionless): its kick strength P for a short
/// pulse, but for a long (adiabatic) pulse no more than the width of the pendular states,
/// about 1.5 sqrt(U0/B) + 3 levels.
pub fn reach_strength(molecule: &Molecule, pulse: &crate::field::Pulse) -> f64 {
    let da = molecule.delta_alpha_a3();
    let adiabatic = 1.5 * (pulse.peak_rate_rad_per_ps(da).abs() / cm_to_rad_per_ps(molecule.revival_b_cm())).sqrt() + 3.0;
    pulse.kick_strength(da).abs().min(adiabatic)
}

impl Solver {
    /// A solver for `molecule` at `temperature_k` with `settings`.
    pub fn new(molecule: &Molecule, temperature_k: f64, settings: SolverSettings) -> Result<Solver> {
        if let Some(t) = molecule.as_top() {
            let mut top = top::TopSolver::new(t, temperature_k, settings)?;
            check_states(top.ensemble.state_count(), settings.max_states.unwrap_or(crate::scenario::DEFAULT_MAX_STATES_TOP), temperature_k)?;
            let progress = Arc::new(RunProgress::default());
            top.progress = progress.clone();
            return Ok(Solver {
                molecule: molecule.clone(),
                rotor: Rotor::Top(Box::new(top)),
                axis: coupling::CoupledAxis::of(molecule),
                settings,
                cache: Mutex::new(HashMap::new()),
                polar_cache: Mutex::new(HashMap::new()),
                lab: Default::default(),
                tilted: tilted::TiltedSolver::new(),
                tilted_top: Default::default(),
                oriented: Default::default(),
                progress,
            });
        }
        let ensemble = ThermalEnsemble::new(molecule, temperature_k, settings.thermal_tolerance)?;
        check_states(ensemble.state_count(), settings.max_states.unwrap_or(crate::scenario::DEFAULT_MAX_STATES_LINEAR), temperature_k)?;
        Ok(Solver {
            molecule: molecule.clone(),
            rotor: Rotor::Linear(ensemble),
            axis: coupling::CoupledAxis::of(molecule),
            settings,
            cache: Mutex::new(HashMap::new()),
            polar_cache: Mutex::new(HashMap::new()),
            lab: Default::default(),
            tilted: tilted::TiltedSolver::new(),
            tilted_top: Default::default(),
            oriented: Default::default(),
            progress: Arc::new(RunProgress::default()),
        })
    }

    /// The thermal ensemble of a linear molecule (None for tops).
    pub fn ensemble(&self) -> Option<&ThermalEnsemble> {
        match &self.rotor {
            Rotor::Linear(e) => Some(e),
            _ => None,
        }
    }

    /// The linear ensemble, on the paths that only linear molecules take (`Solver::path` sends tops elsewhere).
    fn linear(&self) -> &ThermalEnsemble {
        self.ensemble().expect("a linear-molecule path on a linear molecule")
    }

    /// The constants of a linear molecule, on the paths that only linear molecules take.
    fn linear_rotor(&self) -> &crate::molecule::LinearRotor {
        self.molecule.as_linear().expect("a linear-molecule path on a linear molecule")
    }

    /// The top solver (None for linear molecules).
    pub fn top(&self) -> Option<&top::TopSolver> {
        match &self.rotor {
            Rotor::Top(t) => Some(t),
            _ => None,
        }
    }

    /// The solver for a top in orienting fields along Z, built on first use.
    fn oriented(&self) -> Result<&oriented_top::OrientedTopSolver> {
        let built = self.oriented.get_or_init(|| {
            let t = self.top().ok_or_else(|| Error::Numerical("the oriented-top path needs a top".into()))?;
            let mut o = oriented_top::OrientedTopSolver::new(&self.molecule, t.ensemble.temperature_k, self.settings)?;
            o.progress = self.progress.clone();
            Ok(o)
        });
        built.as_ref().map_err(Clone::clone)
    }

    /// Highest J of the thermal ensemble.
    fn thermal_j_max(&self) -> u32 {
        match &self.rotor {
            Rotor::Linear(e) => e.j_max,
            Rotor::Top(t) => t.ensemble.j_max as u32,
        }
    }

    /// This solver reporting its work to `progress` (shared with its top and all-M solvers).
    pub fn with_progress(mut self, progress: Arc<RunProgress>) -> Solver {
        if let Rotor::Top(t) = &mut self.rotor {
            t.progress = progress.clone();
        }
        self.progress = progress;
        self
    }

    /// The path [`Solver::run`] takes for `field` (the one place that decides it; the step estimate follows it).
    fn path(&self, field: &FieldModel) -> RunPath {
        if field.static_without_axis() {
            return if self.molecule.kind() == RotorKind::Linear { RunPath::Tilted } else { RunPath::TiltedTop };
        }
        if !field.is_symmetric_about_z() || field.static_field.is_some_and(|s| s.is_tilted()) {
            return RunPath::AllM;
        }
        match self.molecule.kind() {
            RotorKind::SymmetricTop if field.is_polar() => RunPath::PolarTop,
            RotorKind::AsymmetricTop if field.is_polar() => RunPath::OrientedTop,
            RotorKind::SymmetricTop | RotorKind::AsymmetricTop => RunPath::Top,
            RotorKind::Linear if field.is_polar() || self.settings.both_parities => RunPath::Polar,
            RotorKind::Linear => RunPath::Linear,
        }
    }

    /// The finite-pulse time steps a run of `field` takes on the path `run` chooses (kicks cost none):
    /// the total and the interval that needs the most, as (steps, start, end, step) in ps.
    pub fn time_steps(&self, field: &FieldModel) -> (f64, Option<(f64, f64, f64, f64)>) {
        let spans: Vec<(f64, f64, f64)> = match (self.path(field), self.top()) {
            (RunPath::Top | RunPath::AllM, Some(t)) => finite_spans(&t.schedule(field)),
            (RunPath::OrientedTop | RunPath::TiltedTop, _) => {
                let (a, b) = field.all_intervals().iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), s| (a.min(s.0), b.max(s.1)));
                let (a, b) = if a.is_finite() { (a, b) } else { (0.0, 0.0) };
                self.oriented().map(|o| finite_spans(&o.schedule(field, a, b))).unwrap_or_default()
            }
            (RunPath::Polar | RunPath::PolarTop, _) => polar_spans(&self.polar_schedule(field).0),
            _ => finite_spans(&self.schedule(field)),
        };
        let mut total = 0.0;
        let mut worst: Option<(f64, f64, f64, f64)> = None;
        for (a, b, step) in spans {
            let n = ((b - a) / step).ceil().max(1.0);
            total += n;
            if worst.is_none_or(|w| n > w.0) {
                worst = Some((n, a, b, step));
            }
        }
        (total, worst)
    }

    /// Refuse a run whose finite-pulse steps exceed `settings.max_steps`, naming the input that drives
    /// the cost: the solver step when one is set, else the longest field element in the costliest interval.
    fn check_time_steps(&self, field: &FieldModel) -> Result<()> {
        let (total, worst) = self.time_steps(field);
        if total <= self.settings.max_steps {
            return Ok(());
        }
        let (n, a, b, step) = worst.unwrap_or((total, 0.0, 0.0, 0.0));
        let overlaps = |(lo, hi): (f64, f64)| lo <= b && hi >= a;
        let mut longest: Option<(f64, String)> = None;
        let mut consider = |span: (f64, f64), key: String| {
            if overlaps(span) && longest.as_ref().is_none_or(|l| span.1 - span.0 > l.0) {
                longest = Some((span.1 - span.0, key));
            }
        };
        for (i, p) in field.pulses.iter().enumerate() {
            consider(p.support_ps(), format!("pulses[{i}].fwhm_fs"));
        }
        for (i, t) in field.two_colour.iter().enumerate() {
            consider(t.envelope_pulse().support_ps(), format!("two_colour[{i}].fwhm_fs"));
        }
        for (i, t) in field.terahertz.iter().enumerate() {
            consider(t.support_ps(), format!("terahertz[{i}].duration_fs"));
        }
        let key = if self.settings.step_fs.is_some() { "solver.step_fs".to_string() } else { longest.map(|l| l.1).unwrap_or_else(|| "pulses".into()) };
        Err(Error::input(
            key,
            format!(
                "the run would take {total:.2e} time steps ({n:.2e} from {a:.1} to {b:.1} ps at {:.3} fs), above solver.max_steps = {:.0e}; \
                 shorten or weaken the pulse, use the kick model, or raise solver.max_steps (or pass --allow-long) to go on",
                step * 1e3,
                self.settings.max_steps
            ),
        ))
    }

    /// Population left out of the thermal ensemble by its truncation.
    pub fn discarded_population(&self) -> f64 {
        match &self.rotor {
            Rotor::Linear(e) => e.discarded_population,
            Rotor::Top(t) => t.ensemble.discarded_population,
        }
    }

    /// Rotational partition function of the thermal ensemble, summed to convergence.
    pub fn partition_function(&self) -> f64 {
        match &self.rotor {
            Rotor::Linear(e) => e.partition_function,
            Rotor::Top(t) => t.ensemble.partition_function,
        }
    }

    /// Number of initially populated sublevels.
    pub fn initial_states(&self) -> usize {
        match &self.rotor {
            Rotor::Linear(e) => e.state_count(),
            Rotor::Top(t) => t.ensemble.state_count(),
        }
    }

    /// Operators of a block, built once and cached.
    fn ops(&self, m: u32, parity: u32, size: usize, with_2d: bool) -> Arc<BlockOps> {
        let key = (m, parity, size, with_2d);
        if let Some(o) = self.cache.lock().expect("cache lock").get(&key) {
            return o.clone();
        }
        let o = Arc::new(BlockOps::new(Block { m, parity, size }, self.linear_rotor(), with_2d));
        self.cache.lock().expect("cache lock").insert(key, o.clone());
        o
    }

    /// Highest J the basis may need to start with (thermal top plus room for the kicks).
    fn reference_j(&self, field: &FieldModel) -> u32 {
        self.thermal_j_max() + 2 * self.extra_levels(field) as u32
    }

    /// How far (in J) a pulse can push the rotor: its kick strength P for a short pulse, but for a long
    /// (adiabatic) pulse no more than the width of the pendular states, about 1.5 sqrt(U0/B) + 3 block levels (the basis grows if that is too few).
    fn effective_strength(&self, p: &crate::field::Pulse) -> f64 {
        reach_strength(&self.molecule, p)
    }

    /// Sum of the effective strengths of the laser and two-colour pulses.
    fn total_strength(&self, field: &FieldModel) -> f64 {
        let lasers: f64 = field.pulses.iter().map(|p| self.effective_strength(p)).sum();
        let two_colour: f64 = field
            .two_colour
            .iter()
            .map(|t| {
                self.effective_strength(&crate::field::Pulse {
                    peak_intensity_wcm2: t.fundamental_intensity_wcm2 + t.second_harmonic_intensity_wcm2,
                    ..t.envelope_pulse()
                })
            })
            .sum();
        lasers + two_colour
    }

    /// Block levels added above the thermal top: grows with the total (effective) kick strength.
    fn extra_levels(&self, field: &FieldModel) -> usize {
        let total = self.total_strength(field);
        (0.75 * total.min(1e4)).ceil() as usize + 6
    }

    /// Refuse fields whose total kick strength no basis up to `MAX_BASIS_J` could hold.
    fn check_strength(&self, field: &FieldModel) -> Result<()> {
        let total = self.total_strength(field);
        let room = self.molecule.max_physical_j().saturating_sub(self.thermal_j_max()) as f64;
        if !total.is_finite() || total > room {
            return Err(Error::input(
                "pulses",
                format!(
                    "total kick strength P = {total:.3e} would drive the rotor beyond J = {} (the largest basis kicktrain uses for {}); expected weaker pulses (ΣP below about {room:.0})",
                    self.molecule.max_physical_j(),
                    self.molecule.name
                ),
            ));
        }
        Ok(())
    }

    /// The schedule of kicks and finite intervals for `field` under the configured method.
    pub fn schedule(&self, field: &FieldModel) -> Vec<Event> {
        let da = self.molecule.delta_alpha_a3();
        let j_ref = self.reference_j(field).min(self.molecule.max_physical_j()).max(2);
        // Fastest relevant transition J−2 → J near the top of the basis, rad/ps.
        let d_omega = cm_to_rad_per_ps(self.linear_rotor().energy_cm(j_ref) - self.linear_rotor().energy_cm(j_ref - 2)).abs();
        let mut events = vec![];
        for iv in field.active_intervals() {
            let impulsive = match self.settings.method {
                Method::Kick => true,
                Method::Finite => false,
                Method::Auto => iv.pulses.iter().all(|&i| {
                    let p = &field.pulses[i];
                    // Leading error of replacing a pulse by a kick ~ P (Δω σ)² / 2 (second-order Magnus term).
                    p.kick_strength(da).abs() * (d_omega * p.rms_duration_ps()).powi(2) * 0.5 < 1e-7
                }),
            };
            if impulsive {
                for &i in &iv.pulses {
                    events.extend(pulse_kicks(&field.pulses[i], i, da, self.settings.kick_nodes));
                }
            } else {
                let shortest = iv.pulses.iter().map(|&i| field.pulses[i].time_scale_ps()).fold(f64::INFINITY, f64::min);
                let peak_rate: f64 = iv.pulses.iter().map(|&i| field.pulses[i].peak_rate_rad_per_ps(da).abs()).sum();
                let step_ps = LINEAR_STEP.step_ps(&self.settings, shortest, d_omega, peak_rate);
                events.push(Event::Finite { start_ps: iv.start_ps, end_ps: iv.end_ps, pulses: iv.pulses.clone(), step_ps });
            }
        }
        events.sort_by(|a, b| a.span().0.total_cmp(&b.span().0));
        events
    }

    /// Where the time of the last all-M run went (None before any).
    pub fn lab_timing(&self) -> Option<lab_frame::LabTiming> {
        self.lab.get().map(|l| l.last_timing())
    }

    /// Run `field` through the all-M solver (any polarization in the XZ plane) and sample the direction-cosine
    /// averages ⟨cos²⟩ of each body axis with each lab axis at `times_ps` (ascending). `run` takes this path
    /// by itself when some pulse is not polarized along Z; called directly it also runs Z-polarized fields.
    /// `with_2d` adds the detector-plane ⟨cos²θ_2D⟩ of the alignment axis with its full azimuthal dependence.
    pub fn run_lab_frame(&self, field: &FieldModel, times_ps: &[f64], with_2d: bool) -> Result<RunResult> {
        if times_ps.windows(2).any(|w| w[1] < w[0]) {
            return Err(Error::input("window", "sample times must be ascending"));
        }
        if field.static_field.is_some_and(|s| s.is_tilted()) && self.top().is_some() {
            return Err(Error::input(
                "static_field.angle_deg",
                "a static field at an angle to Z is available for linear molecules only so far; expected angle_deg 0 (or 180) for a top",
            ));
        }
        if field.is_polar() {
            return Err(Error::input(
                "pulses",
                "pulses polarized away from Z cannot yet be combined with a static field, two-colour or terahertz pulses; expected polarization along Z (angle_deg 0, ellipticity 0)",
            ));
        }
        let (events, reach) = match self.top() {
            // Every M of every J is in one basis (cost ∝ J³): start tighter than the M-conserving path
            // (1.2 P + 8 instead of 1.35 P + 10); the edge check grows the basis where a chunk needs more.
            // Measured: P + 6 made a third of the chunks of a 1 ps, P = 11.6 pulse start again.
            Some(t) => {
                t.reach(field)?;
                (t.schedule(field), (1.2 * t.strengths(field)).ceil() as i64 + 8)
            }
            None => {
                self.check_strength(field)?;
                (self.schedule(field), 2 * self.extra_levels(field) as i64)
            }
        };
        let lab = self.lab.get_or_init(|| {
            let rotor = match self.top() {
                Some(t) => lab_frame::LabRotor::from_top(t),
                None => lab_frame::LabRotor::from_linear(self.linear_rotor(), self.linear()),
            };
            let mut lab = lab_frame::LabSolver::new(rotor, self.settings);
            lab.progress = self.progress.clone();
            lab
        });
        let run = lab.run(field, &events, reach, times_ps, with_2d)?;
        let frame = &lab.rotor.frame;
        // (body axis, its frame position): the axis of a linear molecule sits at position 0.
        let axes: Vec<(Option<BodyAxis>, usize)> =
            if lab.rotor.linear { vec![(None, 0)] } else { [BodyAxis::A, BodyAxis::B, BodyAxis::C].iter().map(|&a| (Some(a), frame.position(a))).collect() };
        let positions: Vec<usize> = axes.iter().map(|a| a.1).collect();
        let mut lab_axes = vec![];
        for (f, lab_axis) in [LabAxis::X, LabAxis::Y, LabAxis::Z].into_iter().enumerate() {
            for &(body, pos) in &axes {
                lab_axes.push(LabAxisSeries::new(lab_axis, body, run.values[f][pos].clone()));
            }
        }
        let (align_pos, second_pos) = match self.top() {
            Some(t) => (frame.position(t.top.alignment_axis), Some(frame.position(t.top.second_axis()))),
            None => (0, None),
        };
        let body_axes = second_pos.filter(|_| !lab.rotor.linear).map(|s| crate::observe::BodyAxes {
            a: run.values[2][positions[0]].clone(),
            b: run.values[2][positions[1]].clone(),
            c: run.values[2][positions[2]].clone(),
            three_axis: run.values[2][align_pos].iter().zip(&run.values[0][s]).map(|(a, b)| a.min(*b)).collect(),
            ..Default::default()
        });
        let trace =
            Trace { times_ps: times_ps.to_vec(), cos2: run.values[2][align_pos].clone(), body_axes, lab_axes, cos2_2d: run.cos2_2d, ..Default::default() };
        let statics = run.final_sums.statics();
        let z_align = lab_frame::direction_part(2, align_pos);
        let parts = PairParts {
            cos2: z_align,
            cos2_2d: (statics.len() > lab_frame::TWO_D_PART).then_some(lab_frame::TWO_D_PART),
            three_axis: second_pos.map(|s| ThreeAxisParts { along_z: z_align, second: lab_frame::direction_part(0, s), second_from_z: false }),
        };
        Ok(RunResult {
            trace,
            permanent_cos2: statics[parts.cos2],
            permanent_cos2_2d: parts.cos2_2d.map(|i| statics[i]).unwrap_or(0.0),
            blocks: run.blocks,
            events,
            final_sums: FreeSums::Pairs { sums: run.final_sums, parts },
            permanent_cos: None,
        })
    }

    /// Run a linear molecule in a static field together with fields in the XZ plane (a static field at
    /// any angle, pulses of any polarization in that plane), sampling at `times_ps` (ascending). `run`
    /// takes this path by itself when the static field is tilted or a pulse is not polarized along Z;
    /// called directly it also runs fields all along Z (the same physics as the M-conserving path).
    pub fn run_tilted(&self, field: &FieldModel, times_ps: &[f64]) -> Result<RunResult> {
        if times_ps.windows(2).any(|w| w[1] < w[0]) {
            return Err(Error::input("window", "sample times must be ascending"));
        }
        if self.top().is_some() {
            self.check_time_steps(field)?;
            return tilted_top::run(self.oriented()?, &self.tilted_top, field, times_ps, &self.progress);
        }
        self.check_strength(field)?;
        // A kick of strength P spreads the states over about P values of J: refuse what the largest basis of
        // this path cannot hold before any work (the edge check would find it only after growing there).
        let cap = tilted::MAX_TILTED_J.min(self.linear_rotor().max_physical_j() as i64) as f64;
        let strength = self.total_strength(field);
        if self.thermal_j_max() as f64 + strength > cap {
            return Err(Error::input(
                "pulses",
                format!(
                    "total kick strength P = {strength:.1} would drive the rotor beyond J = {cap}, the largest basis of the tilted-field path (every J and M); expected weaker pulses (ΣP below about {:.0})",
                    cap - self.thermal_j_max() as f64
                ),
            ));
        }
        let b_rate = cm_to_rad_per_ps(self.axis.b_cm);
        let s_max = field.static_field.map(|s| crate::units::dipole_rate_rad_per_ps(self.axis.dipole_debye, s.strength_kv_cm).abs()).unwrap_or(0.0);
        // Room for the laser pulses (every J counts here, and the cost grows about as J⁴: start tight and let
        // the edge check grow the basis) and the static-field mixing (about sqrt(μE/B) levels). Measured on OCS
        // at 1 K in 20 kV/cm at 45°: a 2 ps pulse at 2e12 W/cm² needs J = 41 (7 s; 0.9 P + 8 started at 51,
        // 20 s); a sudden 300 fs pulse at 1e13 grows from 36 to 56 (34 s; 30 s from 0.9 P).
        let (laser_reach, static_reach) = ((0.6 * self.total_strength(field)).ceil() as i64 + 8, (4.0 * (s_max / b_rate).sqrt()).ceil() as i64);
        let reach = laser_reach + static_reach;
        let input = tilted::TiltedInput {
            mol: self.linear_rotor(),
            ensemble: self.linear(),
            dipole_debye: self.axis.dipole_debye,
            delta_alpha_a3: self.axis.delta_alpha_a3,
            settings: &self.settings,
            events: self.schedule(field),
            reach,
            reach_key: if static_reach > laser_reach { "static_field.strength_kv_cm" } else { "pulses" },
            progress: &self.progress,
        };
        self.tilted.run(input, field, times_ps)
    }

    /// Run the field model for scoring a goal on `observable`: as [`Solver::run`], except that fields that
    /// break the parity of J compute only ⟨cos²θ⟩ and the goal's observable at the samples (the other
    /// series of the trace stay empty), which is what a search needs.
    pub fn run_for_goal(&self, field: &FieldModel, times_ps: &[f64], observable: Observable) -> Result<RunResult> {
        let with_2d = observable.needs_cos2_2d();
        let parity_breaking = field.is_polar() || self.settings.both_parities;
        if !parity_breaking || matches!(self.path(field), RunPath::AllM | RunPath::Tilted | RunPath::TiltedTop) || times_ps.windows(2).any(|w| w[1] < w[0]) {
            return self.run(field, times_ps, with_2d);
        }
        let wanted = [true, with_2d, observable == Observable::Cos, false];
        match self.top() {
            Some(t) if self.molecule.kind() == RotorKind::SymmetricTop => self.run_polar_top(t, field, times_ps, wanted),
            Some(_) => self.oriented()?.run(field, times_ps, with_2d),
            None => self.run_polar(field, times_ps, wanted),
        }
    }

    /// Run the field model and sample ⟨cos²θ⟩ (and ⟨cos²θ_2D⟩ if `with_2d`) at `times_ps` (ascending).
    /// Fields that break the parity of J (or `both_parities`) also give ⟨cosθ⟩ and ⟨cos³θ⟩.
    pub fn run(&self, field: &FieldModel, times_ps: &[f64], with_2d: bool) -> Result<RunResult> {
        if times_ps.windows(2).any(|w| w[1] < w[0]) {
            return Err(Error::input("window", "sample times must be ascending"));
        }
        self.check_time_steps(field)?;
        if self.settings.frame_steps == Some(true) && self.path(field) != RunPath::TiltedTop {
            return Err(Error::input(
                "solver.frame_steps",
                "steps in the instantaneous frame are available for tops in a static field at an angle to Z only; expected false or no key",
            ));
        }
        match (self.path(field), self.top()) {
            (RunPath::AllM, _) => return self.run_lab_frame(field, times_ps, with_2d),
            (RunPath::Tilted | RunPath::TiltedTop, _) => return self.run_tilted(field, times_ps),
            (RunPath::PolarTop, Some(t)) => return self.run_polar_top(t, field, times_ps, ALL_POLAR),
            (RunPath::OrientedTop, _) => return self.oriented()?.run(field, times_ps, with_2d),
            (RunPath::Top, Some(t)) => return t.run(field, times_ps, with_2d),
            (RunPath::Polar, _) => return self.run_polar(field, times_ps, ALL_POLAR),
            _ => {}
        }
        self.check_strength(field)?;
        let events = self.schedule(field);
        let extra = self.extra_levels(field);
        // Field-free phases before each event are the same for every block: tabulate them once by J.
        let j_table = (self.thermal_j_max() + 2 * extra as u32 + 16).min(self.molecule.max_physical_j()) as usize;
        let t_first = events.first().map(|e| e.span().0).or(times_ps.first().copied()).unwrap_or(0.0);
        let mut t_prev = t_first;
        let tables: Vec<Vec<(f64, f64)>> = events
            .iter()
            .map(|ev| {
                let dt = ev.span().0 - t_prev;
                t_prev = ev.span().1;
                (0..=j_table as u32)
                    .map(|j| {
                        let (s, c) = (-cm_to_rad_per_ps(self.linear_rotor().energy_cm(j)) * dt).sin_cos();
                        (c, s)
                    })
                    .collect()
            })
            .collect();
        let outcomes: Vec<BlockOutcome> = {
            let ensemble = self.linear();
            self.progress.plan(ensemble.blocks.len());
            ensemble
                .blocks
                .par_iter()
                .map(|bp| {
                    let r = self.run_block(bp, &driver::Run { field, items: &events, times: times_ps, t_first }, &tables, with_2d, extra);
                    self.progress.finish_one();
                    r
                })
                .collect::<Result<Vec<_>>>()?
        };
        let mut cos2 = vec![0.0; times_ps.len()];
        let mut c2d = vec![0.0; times_ps.len()];
        for o in &outcomes {
            for (i, (a, b)) in o.values.iter().enumerate() {
                cos2[i] += a;
                c2d[i] += b;
            }
        }
        // Merge the blocks' coherences by J and evaluate each field-free stretch once.
        let j_count = outcomes.iter().map(|o| o.report.j_max as usize + 1).max().unwrap_or(1);
        let omega: Vec<f64> = (0..j_count as u32).map(|j| cm_to_rad_per_ps(self.linear_rotor().energy_cm(j))).collect();
        let merge = |t0: f64, pick: &dyn Fn(&BlockOutcome) -> &BlockSums| {
            let mut sums = LevelSums::new(omega.clone(), t0, with_2d);
            for o in &outcomes {
                sums.add(if o.report.m > 0 { 2.0 } else { 1.0 }, pick(o));
            }
            sums
        };
        if let Some(first) = outcomes.first() {
            for (g, &(from, to, t0, _)) in first.gaps.iter().enumerate() {
                let sums = merge(t0, &|o: &BlockOutcome| &o.gaps[g].3);
                sums.eval_series(&times_ps[from..to], |i, (a, b)| {
                    cos2[from + i] += a;
                    c2d[from + i] += b;
                });
            }
        }
        let t_end = events.last().map(|e| e.span().1).or(times_ps.first().copied()).unwrap_or(0.0);
        let final_sums = merge(t_end, &|o: &BlockOutcome| &o.final_sums);
        let blocks = outcomes.into_iter().map(|o| o.report).collect();
        let trace = Trace { times_ps: times_ps.to_vec(), cos2, cos2_2d: with_2d.then_some(c2d), ..Default::default() };
        Ok(RunResult {
            trace,
            permanent_cos2: final_sums.cos2_static,
            permanent_cos2_2d: final_sums.abscos_static,
            blocks,
            events,
            final_sums: FreeSums::Levels(final_sums),
            permanent_cos: None,
        })
    }

    fn run_block(&self, bp: &BlockPopulation, run: &driver::Run<Event>, tables: &[Vec<(f64, f64)>], with_2d: bool, extra: usize) -> Result<BlockOutcome> {
        let j_thermal = bp.levels.last().map(|l| l.0).unwrap_or(bp.m);
        let j_limit = self.molecule.max_physical_j();
        let first = Block::size_to_reach(bp.m, bp.parity, j_thermal + 2 * extra as u32);
        // The largest block whose top J stays within j_limit (size_to_reach rounds down to the block's parity).
        let cap = if (Block { m: bp.m, parity: bp.parity, size: 1 }).j_min() > j_limit { 0 } else { Block::size_to_reach(bp.m, bp.parity, j_limit) };
        grow_basis(
            first,
            cap,
            |size| self.try_block(&self.ops(bp.m, bp.parity, size, with_2d), bp, run, tables, with_2d),
            || {
                Error::Numerical(format!(
                    "block |M| = {}, {} J: the basis would need J > {j_limit}, beyond where the centrifugal-distortion formula holds; lower the intensities or the temperature",
                    bp.m,
                    if bp.parity == 0 { "even" } else { "odd" }
                ))
            },
        )
    }

    /// One attempt at a block with a fixed basis; None if the edge population exceeds the tolerance.
    fn try_block(
        &self,
        ops: &BlockOps,
        bp: &BlockPopulation,
        run: &driver::Run<Event>,
        tables: &[Vec<(f64, f64)>],
        with_2d: bool,
    ) -> Result<Option<BlockOutcome>> {
        let driver::Run { field, items: events, times, t_first } = *run;
        let block = ops.block;
        let start: Vec<usize> = bp.levels.iter().map(|l| ((l.0 - block.j_min()) / 2) as usize).collect();
        let kernel = LinearKernel {
            ops,
            pops: bp.levels.iter().map(|l| l.1).collect(),
            g: block.m_degeneracy(),
            with_2d,
            tables,
            field,
            da: self.molecule.delta_alpha_a3(),
        };
        let Some(w) = driver::walk(&kernel, BlockState::new(block.size, &start, t_first), events, times, self.settings.edge_tolerance) else {
            return Ok(None);
        };
        let values = match w.values.as_slice() {
            [] => vec![],
            [a, b] => a.iter().zip(b).map(|(a, b)| (*a, *b)).collect(),
            _ => unreachable!("two observables"),
        };
        let mut gaps: Vec<(usize, usize, f64, BlockSums)> = w.stretches.into_iter().map(|(r, t, sums)| (r.start, r.end, t, sums)).collect();
        let final_sums = kernel.stretch(&w.state);
        if !w.rest.is_empty() {
            gaps.push((w.rest.start, w.rest.end, w.state.t_ps, final_sums.clone()));
        }
        let report = BlockReport { m: block.m, parity: BlockSymmetry::JParity(block.parity), j_max: block.j_max(), size: block.size, edge_population: w.edge };
        Ok(Some(BlockOutcome { values, gaps, final_sums, report }))
    }
}

/// A linear molecule's block of one |M| and one parity of J in laser pulses (a tridiagonal cos²θ).
struct LinearKernel<'a> {
    ops: &'a BlockOps,
    /// Populations of the block's initial states.
    pops: Vec<f64>,
    /// Degeneracy of the block (±M).
    g: f64,
    with_2d: bool,
    /// Field-free phases by J before each event (shared by every block).
    tables: &'a [Vec<(f64, f64)>],
    field: &'a FieldModel,
    /// Polarizability anisotropy, Å³.
    da: f64,
}

impl driver::Kernel for LinearKernel<'_> {
    type Item = Event;
    type Stretch = BlockSums;

    fn observables(&self) -> usize {
        2
    }

    fn omega(&self) -> &[f64] {
        &self.ops.omega
    }

    fn edge(&self, state: &BlockState) -> f64 {
        state.edge_population(2)
    }

    fn sample(&self, st: &BlockState, out: &mut [f64]) {
        out[0] = self.g * st.expect_tridiagonal(&self.pops, &self.ops.cos2_diag, &self.ops.cos2_off);
        out[1] = if self.with_2d { self.g * st.expect_dense(&self.pops, self.ops.abscos.as_ref().expect("abscos")) } else { 0.0 };
    }

    fn stretch(&self, st: &BlockState) -> BlockSums {
        BlockSums::from_state(self.ops, st, &self.pops, self.with_2d)
    }

    fn free(&self, st: &mut BlockState, index: usize, dt: f64) {
        st.free_with(&FreePhases::from_table(self.ops, dt, &self.tables[index]));
    }

    fn instant(&self, st: &mut BlockState, item: &Event) {
        if let Event::Kick { strength, .. } = item {
            st.kick(self.ops, *strength);
        }
    }

    fn finite_kick(&self, _index: usize, item: &Event, st: &mut BlockState, t: f64, h: f64) {
        if let Event::Finite { pulses, .. } = item {
            st.kick(self.ops, h * self.field.alignment_rate_of(pulses, t, self.da));
        }
    }

    fn breaks(&self, item: &Event) -> Vec<f64> {
        item.breaks(self.field)
    }
}

impl driver::Scheduled for Event {
    fn span(&self) -> (f64, f64) {
        Event::span(self)
    }

    fn finite_step(&self) -> Option<f64> {
        match self {
            Event::Finite { step_ps, .. } => Some(*step_ps),
            Event::Kick { .. } => None,
        }
    }
}

impl Solver {
    /// Run averaged over the focal volume: every laser and two-colour intensity is scaled by the
    /// quadrature fractions of `avg` and the results are summed with its weights. Static and terahertz
    /// fields are taken as uniform across the focus.
    pub fn run_focal(&self, field: &FieldModel, times: &[f64], with_2d: bool, avg: &FocalAverage) -> Result<RunResult> {
        let mut out: Option<RunResult> = None;
        let (mut perm, mut perm2d, mut perm_cos) = (0.0, 0.0, 0.0);
        // Linear runs whose coherence sums share one time combine into exact sums of the average.
        let mut combined: Option<LevelSums> = None;
        let mut combinable = true;
        for (u, w) in avg.nodes() {
            let mut f = field.clone();
            f.pulses.iter_mut().for_each(|p| p.peak_intensity_wcm2 *= u);
            f.two_colour.iter_mut().for_each(|t| {
                t.fundamental_intensity_wcm2 *= u;
                t.second_harmonic_intensity_wcm2 *= u;
            });
            let r = self.run(&f, times, with_2d)?;
            perm += w * r.permanent_cos2;
            perm2d += w * r.permanent_cos2_2d;
            perm_cos += w * r.permanent_cos.unwrap_or(0.0);
            match (&r.final_sums, &mut combined) {
                (FreeSums::Levels(ls), None) if combinable && ls.t0_ps.is_finite() => {
                    let mut first = ls.clone();
                    first.scale(w);
                    combined = Some(first);
                }
                (FreeSums::Levels(ls), Some(acc)) if combinable && acc.compatible(ls) => acc.add_scaled(w, ls),
                _ => combinable = false,
            }
            match &mut out {
                None => {
                    let mut first = r;
                    first.trace.scale(w);
                    out = Some(first);
                }
                Some(acc) => {
                    acc.trace.add_scaled(w, &r.trace);
                    for (a, b) in acc.blocks.iter_mut().zip(&r.blocks) {
                        if b.j_max > a.j_max {
                            *a = b.clone();
                        }
                    }
                }
            }
        }
        let mut r = out.expect("at least two quadrature points");
        // The three-axis goal of the average is the smaller of the two averaged values (not a mean of minima).
        if let (Some(top), Some(axes)) = (self.molecule.as_top(), &r.trace.body_axes) {
            let three_axis = three_axis_of_averages(top, axes, &r.trace);
            r.trace.body_axes.as_mut().expect("checked above").three_axis = three_axis;
        }
        r.permanent_cos2 = perm;
        r.permanent_cos2_2d = perm2d;
        r.permanent_cos = r.permanent_cos.map(|_| perm_cos);
        r.final_sums = match combined {
            Some(sums) if combinable => FreeSums::Levels(sums),
            _ => {
                // No single set of coherence sums: goals use the samples alone.
                let mut sums = LevelSums::new(vec![], f64::INFINITY, false);
                sums.cos2_static = perm;
                sums.abscos_static = perm2d;
                FreeSums::Levels(sums)
            }
        };
        Ok(r)
    }
}

/// One polar block's result: per-observable samples, time averages after the last item, and its report.
type PolarOutcome = (Vec<Vec<f64>>, Vec<f64>, BlockReport);

/// Sum the polar blocks' samples and time averages (cos²θ, |cosθ|, cosθ, cos³θ) over `n` sample times.
fn sum_polar(outcomes: Vec<PolarOutcome>, n: usize) -> ([Vec<f64>; POLAR_OBSERVABLES], [f64; POLAR_OBSERVABLES], Vec<BlockReport>) {
    let mut values = vec![vec![0.0; n]; POLAR_OBSERVABLES];
    let mut permanent = [0.0; POLAR_OBSERVABLES];
    let mut reports = vec![];
    for (v, perm, report) in outcomes {
        for o in 0..POLAR_OBSERVABLES {
            for i in 0..n {
                values[o][i] += v[o][i];
            }
            permanent[o] += perm[o];
        }
        reports.push(report);
    }
    (values.try_into().expect("four observables"), permanent, reports)
}

/// One step of the schedule with both parities.
/// Refuse an ensemble of more than `limit` initial states (each is propagated), naming the temperature.
fn check_states(states: usize, limit: f64, temperature_k: f64) -> Result<()> {
    if states as f64 <= limit {
        return Ok(());
    }
    Err(Error::input(
        "temperature_k",
        format!(
            "at {temperature_k} K the thermal ensemble holds {states} initial states, above solver.max_states = {limit:.0e}; \
             lower the temperature, or raise solver.max_states (or pass --allow-long) to go on"
        ),
    ))
}

/// Which solver path a run takes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum RunPath {
    /// Every M in one basis (a field not symmetric about Z).
    AllM,
    /// A linear molecule in a static field with a field that is not symmetric about Z (a tilted static
    /// field, or tilted or elliptical pulses): every J and M in two reflection blocks.
    Tilted,
    /// A top in a static field with a field that is not symmetric about Z: every J and M in blocks of
    /// one class of K and one sign under the reflection through XZ combined with a body reflection.
    TiltedTop,
    /// A symmetric top in an orienting field: (K, M) blocks holding every J, coupled through the figure axis.
    PolarTop,
    /// A top in a field symmetric about Z that does not orient it.
    Top,
    /// An asymmetric top in an orienting field along Z.
    OrientedTop,
    /// A linear molecule in one block per |M| holding both parities.
    Polar,
    /// A linear molecule in (|M|, parity) blocks.
    Linear,
}

/// (start, end, step) of every finite-pulse interval of a schedule.
fn finite_spans(events: &[Event]) -> Vec<(f64, f64, f64)> {
    events.iter().filter_map(|e| if let Event::Finite { start_ps, end_ps, step_ps, .. } = e { Some((*start_ps, *end_ps, *step_ps)) } else { None }).collect()
}

/// (start, end, step) of every finite interval of a polar schedule.
fn polar_spans(items: &[PolarItem]) -> Vec<(f64, f64, f64)> {
    items.iter().filter_map(|e| if let PolarItem::Finite { start_ps, end_ps, step_ps } = e { Some((*start_ps, *end_ps, *step_ps)) } else { None }).collect()
}

enum PolarItem {
    /// exp(i[θ1 cosθ + θ2 cos²θ + θ3 cos³θ]) at time t.
    Kick { t_ps: f64, theta: [f64; 3] },
    /// Time-dependent propagation through all fields from start to end with steps ≤ step.
    Finite { start_ps: f64, end_ps: f64, step_ps: f64 },
    /// The static field switches on or off.
    Switch(f64),
}

impl PolarItem {
    fn span(&self) -> (f64, f64) {
        match self {
            PolarItem::Kick { t_ps, .. } => (*t_ps, *t_ps),
            PolarItem::Finite { start_ps, end_ps, .. } => (*start_ps, *end_ps),
            PolarItem::Switch(t) => (*t, *t),
        }
    }
}

impl Solver {
    /// Static dipole coupling rate μE/ħ (rad/ps) at time t (ps).
    fn static_rate(&self, field: &FieldModel, t_ps: f64) -> f64 {
        field.static_field.map(|s| crate::units::dipole_rate_rad_per_ps(self.axis.dipole_debye, s.along_z_at(t_ps))).unwrap_or(0.0)
    }

    /// The schedule with both parities: kicks or finite intervals for every time-dependent element
    /// (laser, two-colour, terahertz), plus static-field switches; and the laser events for reports.
    fn polar_schedule(&self, field: &FieldModel) -> (Vec<PolarItem>, Vec<Event>) {
        use crate::units::{BETA_AU, EPSILON_0, HBAR, dipole_rate_rad_per_ps, peak_field_v_per_m};
        let mol = &self.axis;
        let da = mol.delta_alpha_a3;
        let j_ref = self.reference_j(field).min(self.molecule.max_physical_j()).max(2);
        let d_omega = cm_to_rad_per_ps(mol.energy_cm(j_ref) - mol.energy_cm(j_ref - 1)).abs();
        let overlaps = |(a, b): (f64, f64), lo: f64, hi: f64| a <= hi && b >= lo;
        let mut items = vec![];
        let mut laser_events = vec![];
        for (lo, hi, shortest) in field.all_intervals() {
            let lasers: Vec<usize> =
                (0..field.pulses.len()).filter(|&i| field.pulses[i].peak_intensity_wcm2 > 0.0 && overlaps(field.pulses[i].support_ps(), lo, hi)).collect();
            // A terahertz pulse acts through its field shape (a single cycle has no net area), so it is
            // never replaced by a kick unless the user forces kicks for everything.
            let has_thz = field.terahertz.iter().any(|t| overlaps(t.support_ps(), lo, hi));
            let kick_mode = self.settings.method == Method::Kick && !(has_thz && self.settings.kick_terahertz_as_finite);
            if kick_mode {
                for &i in &lasers {
                    for e in pulse_kicks(&field.pulses[i], i, da, self.settings.kick_nodes) {
                        if let Event::Kick { t_ps, strength, .. } = e {
                            items.push(PolarItem::Kick { t_ps, theta: [0.0, strength, 0.0] });
                        }
                        laser_events.push(e);
                    }
                }
                for tc in field.two_colour.iter().filter(|t| overlaps(t.envelope_pulse().support_ps(), lo, hi)) {
                    let env = tc.envelope_pulse();
                    let theta2 =
                        coupling_rad_per_ps_per_a3_wcm2() * da * (tc.fundamental_intensity_wcm2 + tc.second_harmonic_intensity_wcm2) * env.envelope_area_ps();
                    let e1 = peak_field_v_per_m(tc.fundamental_intensity_wcm2);
                    let e2 = peak_field_v_per_m(tc.second_harmonic_intensity_wcm2);
                    let g = 0.125 * e1 * e1 * e2 * tc.phase_rad.cos() * BETA_AU / HBAR * 1e-12 * tc.three_halves_area_ps();
                    let (bp, bt) = (mol.beta_parallel_au, mol.beta_perpendicular_au);
                    items.push(PolarItem::Kick { t_ps: tc.center_ps, theta: [g * 3.0 * bt, theta2, g * (bp - 3.0 * bt)] });
                }
                for th in field.terahertz.iter().filter(|t| overlaps(t.support_ps(), lo, hi)) {
                    let (a1, a2) = th.field_areas();
                    let theta1 = dipole_rate_rad_per_ps(mol.dipole_debye, a1);
                    let theta2 = 0.5 * 4.0 * std::f64::consts::PI * EPSILON_0 * da * 1e-30 * a2 * 1e10 / HBAR * 1e-12;
                    items.push(PolarItem::Kick { t_ps: th.center_ps, theta: [theta1, theta2, 0.0] });
                }
            } else {
                // The largest coupling rate in the interval (every element, sampled densely).
                let mut peak: f64 = 0.0;
                for k in 0..=400 {
                    let r = coupling::rates(field, lo + (hi - lo) * k as f64 / 400.0, mol);
                    peak = peak.max(r.u1.abs()).max(r.u2.abs()).max(r.u3.abs());
                }
                let step_ps = LINEAR_STEP.step_ps(&self.settings, shortest, d_omega, peak);
                items.push(PolarItem::Finite { start_ps: lo, end_ps: hi, step_ps });
                if !lasers.is_empty() {
                    laser_events.push(Event::Finite { start_ps: lo, end_ps: hi, pulses: lasers, step_ps });
                }
            }
        }
        if let Some(sf) = field.static_field {
            items.extend(sf.on_ps.into_iter().chain(sf.off_ps).map(PolarItem::Switch));
        }
        items.sort_by(|a, b| a.span().0.total_cmp(&b.span().0));
        (items, laser_events)
    }

    /// Levels to add above a polar block's thermal top: room for the laser kicks, the static-field mixing
    /// (about sqrt(μE/B) levels) and the dipole kicks of `items`.
    fn polar_extra(&self, field: &FieldModel, items: &[PolarItem]) -> usize {
        let b_rate = cm_to_rad_per_ps(self.axis.b_cm);
        let s_max = field.static_field.map(|s| crate::units::dipole_rate_rad_per_ps(self.axis.dipole_debye, s.strength_kv_cm).abs()).unwrap_or(0.0);
        let dipole_kicks: f64 = items.iter().map(|i| if let PolarItem::Kick { theta, .. } = i { theta[0].abs() + theta[2].abs() } else { 0.0 }).sum();
        2 * self.extra_levels(field) + (4.0 * (s_max / b_rate).sqrt()).ceil() as usize + (1.5 * dipole_kicks).ceil() as usize + 4
    }

    /// The solver with one block per |M| holding both parities of J (static, two-colour, terahertz fields).
    fn run_polar(&self, field: &FieldModel, times: &[f64], wanted: [bool; POLAR_OBSERVABLES]) -> Result<RunResult> {
        self.check_strength(field)?;
        let (items, events) = self.polar_schedule(field);
        let t_first = items.first().map(|e| e.span().0).into_iter().chain(times.first().copied()).fold(f64::INFINITY, f64::min);
        let t_first = if t_first.is_finite() { t_first } else { 0.0 };
        let extra = self.polar_extra(field, &items);
        let pops = self.linear().merged_by_m();
        let outcomes: Vec<PolarOutcome> = {
            self.progress.plan(pops.len());
            pops.par_iter()
                .map(|bp| {
                    let r = self.run_polar_block(bp, &PolarRun { run: driver::Run { field, items: &items, times, t_first }, wanted }, extra);
                    self.progress.finish_one();
                    r
                })
                .collect::<Result<Vec<_>>>()?
        };
        let (values, permanent, blocks) = sum_polar(outcomes, times.len());
        let (cos2, cos2_2d, orientation) = polar_series(values, wanted);
        let trace = Trace { times_ps: times.to_vec(), cos2, cos2_2d, orientation, ..Default::default() };
        // Coherence sums by J do not apply in a static field: goals are scored on the samples alone.
        let mut final_sums = LevelSums::new(vec![], f64::INFINITY, false);
        final_sums.cos2_static = permanent[0];
        final_sums.abscos_static = permanent[1];
        Ok(RunResult {
            trace,
            permanent_cos2: permanent[0],
            permanent_cos2_2d: permanent[1],
            blocks,
            events,
            final_sums: FreeSums::Levels(final_sums),
            permanent_cos: Some(permanent[2]),
        })
    }

    /// One |M| block with both parities: returns per-observable contributions, time averages after the
    /// last item, and the report. Grows the basis until the edge population is below tolerance.
    fn run_polar_block(&self, bp: &BlockPopulation, run: &PolarRun, extra: usize) -> Result<PolarOutcome> {
        let j_thermal = bp.levels.last().map(|l| l.0).unwrap_or(bp.m);
        let j_limit = self.molecule.max_physical_j();
        let first = Block::size_to_reach(bp.m, BOTH_PARITIES, j_thermal + extra as u32);
        let cap = if bp.m > j_limit { 0 } else { Block::size_to_reach(bp.m, BOTH_PARITIES, j_limit) };
        grow_basis(
            first,
            cap,
            |size| {
                let cached = self.polar_cache.lock().expect("cache lock").get(&(bp.m, size)).cloned();
                let ops = match cached {
                    Some(o) => o,
                    None => {
                        let o = Arc::new(PolarOps::new(bp.m, size, self.linear_rotor()));
                        self.polar_cache.lock().expect("cache lock").insert((bp.m, size), o.clone());
                        o
                    }
                };
                self.try_polar_block(&ops, &bp.levels, run)
            },
            || Error::Numerical(format!("block |M| = {}: the basis would need J > {j_limit}; lower the field strengths or the temperature", bp.m)),
        )
    }

    fn try_polar_block(&self, ops: &PolarOps, levels: &[(u32, f64)], run: &PolarRun) -> Result<Option<PolarOutcome>> {
        let PolarRun { run: driver::Run { field, items, times, t_first }, wanted } = *run;
        let g = ops.degeneracy;
        let pops: Vec<f64> = levels.iter().map(|l| l.1).collect();
        let index: Vec<usize> = levels.iter().map(|l| (l.0 - ops.j_first) as usize).collect();
        // A static field on from the start was met adiabatically: start in the dressed states that
        // correlate with the thermal field-free levels (same energy order within the block).
        // The field the molecules arrived in: on from the start (no on_ps) and not yet switched off.
        let arrived_in = field.static_field.filter(|s| s.on_ps.is_none() && s.off_ps.map(|o| o >= t_first).unwrap_or(true));
        let s0 = arrived_in.map(|s| crate::units::dipole_rate_rad_per_ps(self.axis.dipole_debye, s.along_z())).unwrap_or(0.0);
        let starts_dressed = s0 != 0.0;
        let state = if starts_dressed {
            let e = ops.static_eigen(s0);
            let mut cols = DMatrix::zeros(ops.size(), index.len());
            for (c, &n) in index.iter().enumerate() {
                cols.set_column(c, &e.s.column(n));
            }
            BlockState::from_columns(&cols, t_first)
        } else {
            BlockState::new(ops.size(), &index, t_first)
        };
        let switch_times: Vec<f64> = field.static_field.map(|s| s.on_ps.into_iter().chain(s.off_ps).collect()).unwrap_or_default();
        let mut breaks: Vec<f64> = field.pulses.iter().flat_map(|p| p.breakpoints_ps()).collect();
        breaks.extend(field.two_colour.iter().flat_map(|t| t.envelope_pulse().breakpoints_ps()));
        breaks.extend(switch_times.iter().copied());
        // Only the wanted observables: the others stay zero (and are dropped from the trace).
        let active: Vec<usize> = (0..POLAR_OBSERVABLES).filter(|&o| wanted[o]).collect();
        let kernel = PolarKernel { solver: self, ops, pops: pops.clone(), g, field, active: active.clone(), breaks };
        let Some(w) = driver::walk(&kernel, state, items, times, self.settings.edge_tolerance) else {
            return Ok(None);
        };
        let mut values = w.values;
        if values.is_empty() {
            values = vec![vec![0.0; times.len()]; POLAR_OBSERVABLES];
        }
        for (range, _, sums) in &w.stretches {
            sums.eval_series(&times[range.clone()], |i, vals| {
                for (&o, v) in active.iter().zip(vals) {
                    values[o][range.start + i] = g * v;
                }
            });
        }
        let (state, mut edge) = (w.state, w.edge);
        let rate_end = self.static_rate(field, state.t_ps);
        let sums = kernel.sums_at(&state, rate_end);
        let rest = w.rest;
        sums.eval_series(&times[rest.clone()], |i, vals| {
            for (&o, v) in active.iter().zip(vals) {
                values[o][rest.start + i] = g * v;
            }
        });
        // Edge also after a long static-field stretch (dressed states reach higher J).
        let e = ops.static_eigen(rate_end);
        let (re, _) = state.density(&pops);
        let rho_e = &e.st * &re * &e.s;
        let n = ops.size();
        let mut top = 0.0;
        for i in 0..n {
            top += rho_e[(i, i)] * (e.s[(n - 1, i)].powi(2) + e.s[(n - 2, i)].powi(2));
        }
        edge = edge.max(top / pops.iter().sum::<f64>());
        if edge > self.settings.edge_tolerance {
            return Ok(None);
        }
        let mut perm = vec![0.0; POLAR_OBSERVABLES];
        for (&o, v) in active.iter().zip(&sums.statics) {
            perm[o] = g * v;
        }
        let report = BlockReport { m: ops.block.m, parity: ops.label.clone(), j_max: ops.j_last(), size: ops.size(), edge_population: edge };
        Ok(Some((values, perm, report)))
    }
}

/// What every polar block of one run shares: the field, its schedule, the sample times, the start of
/// the propagation and which observables are wanted.
#[derive(Clone, Copy)]
pub(crate) struct PolarRun<'a> {
    run: driver::Run<'a, PolarItem>,
    wanted: [bool; POLAR_OBSERVABLES],
}

/// A polar block of one |M| holding every J (or a symmetric top's (K, M) block) in fields that break
/// the parity of J: static, terahertz, two-colour and laser fields.
struct PolarKernel<'a> {
    solver: &'a Solver,
    ops: &'a PolarOps,
    /// Populations of the block's initial states.
    pops: Vec<f64>,
    /// Degeneracy of the block.
    g: f64,
    field: &'a FieldModel,
    /// The observables asked for (indices below `POLAR_OBSERVABLES`).
    active: Vec<usize>,
    /// Kinks of every envelope and the static-field switches.
    breaks: Vec<f64>,
}

impl PolarKernel<'_> {
    /// The static-field rate just after the state's time (so that a switch at exactly that time counts).
    fn rate_after(&self, st: &BlockState) -> f64 {
        self.solver.static_rate(self.field, st.t_ps + 1e-9 * (1.0 + st.t_ps.abs()))
    }

    /// Field-free or static-field stretch from the state's time: sums in the eigenbasis of H0 − sX.
    fn sums_at(&self, st: &BlockState, rate: f64) -> DenseSums {
        let (re, im) = st.density(&self.pops);
        let e = self.ops.static_eigen(rate);
        let to_eig = |m: &DMatrix<f64>| &e.st * m * &e.s;
        let obs: Vec<DMatrix<f64>> = self.active.iter().map(|&o| to_eig(&self.ops.observables[o])).collect();
        DenseSums::new(&to_eig(&re), &to_eig(&im), &obs, &e.eps, st.t_ps)
    }
}

impl driver::Kernel for PolarKernel<'_> {
    type Item = PolarItem;
    type Stretch = DenseSums;

    fn observables(&self) -> usize {
        POLAR_OBSERVABLES
    }

    fn omega(&self) -> &[f64] {
        &self.ops.omega
    }

    fn edge(&self, state: &BlockState) -> f64 {
        state.edge_population(2)
    }

    fn sample(&self, st: &BlockState, out: &mut [f64]) {
        for &o in &self.active {
            out[o] = self.g * st.expect_dense(&self.pops, &self.ops.observables[o]);
        }
    }

    fn stretch(&self, st: &BlockState) -> DenseSums {
        self.sums_at(st, self.rate_after(st))
    }

    fn free(&self, st: &mut BlockState, _index: usize, dt: f64) {
        let rate = self.rate_after(st);
        self.ops.evolve_static(st, rate, dt);
    }

    fn instant(&self, st: &mut BlockState, item: &PolarItem) {
        if let PolarItem::Kick { theta, .. } = item {
            self.ops.kick(st, theta[0], theta[1], theta[2]);
        }
    }

    fn finite_kick(&self, _index: usize, _item: &PolarItem, st: &mut BlockState, t: f64, h: f64) {
        let r = coupling::rates(self.field, t, &self.solver.axis);
        self.ops.kick(st, h * r.u1, h * r.u2, h * r.u3);
    }

    fn breaks(&self, _item: &PolarItem) -> Vec<f64> {
        self.breaks.clone()
    }
}

impl driver::Scheduled for PolarItem {
    fn span(&self) -> (f64, f64) {
        PolarItem::span(self)
    }

    fn finite_step(&self) -> Option<f64> {
        match self {
            PolarItem::Finite { step_ps, .. } => Some(*step_ps),
            _ => None,
        }
    }

    fn is_switch(&self) -> bool {
        matches!(self, PolarItem::Switch(_))
    }
}

/// A finished simulation of a scenario.
#[derive(Debug, Clone)]
pub struct Simulation {
    /// The scenario that was run.
    pub scenario: Scenario,
    /// The solver's result.
    pub result: RunResult,
    /// Population left out of the thermal ensemble.
    pub discarded_population: f64,
    /// Rotational partition function of the thermal ensemble (see `ThermalEnsemble::partition_function`).
    pub partition_function: f64,
    /// Initially populated |J M⟩ sublevels.
    pub initial_states: usize,
    /// The scenario's goal scored on this run, on the focal average when one is set; filled by
    /// `design::score::simulate_scored` (None from [`simulate`], which runs the physics only).
    pub goal_score: Option<Score>,
    /// The run averaged over the focal volume (None without `focal_average`).
    pub averaged: Option<RunResult>,
    /// Wall-clock run time, s.
    pub run_time_s: f64,
}

/// Run a scenario: thermal ensemble, schedule, propagation and both alignment observables over the window.
pub fn simulate(scenario: &Scenario) -> Result<Simulation> {
    simulate_with_progress(scenario, Arc::new(RunProgress::default()))
}

/// [`simulate`], counting the blocks of its runs in `progress` as they finish (for a progress bar).
pub fn simulate_with_progress(scenario: &Scenario, progress: Arc<RunProgress>) -> Result<Simulation> {
    let t0 = std::time::Instant::now();
    let solver = solver_for(scenario, progress)?;
    let sim = simulate_with(scenario, &solver)?;
    Ok(Simulation { run_time_s: t0.elapsed().as_secs_f64(), ..sim })
}

/// The solver of a validated `scenario` (its thermal ensemble built, its trace's memory checked),
/// reporting its work to `progress`.
pub fn solver_for(scenario: &Scenario, progress: Arc<RunProgress>) -> Result<Solver> {
    scenario.validate()?;
    // The trace (up to 16 columns, twice with a focal average) and its CSV text, before any work.
    let samples = ((scenario.window.stop_ps - scenario.window.start_ps) * 1000.0 / scenario.window.step_fs).floor() as usize + 1;
    crate::resources::check_memory(
        crate::resources::trace_bytes(samples, 16, if scenario.focal_average.is_some() { 2 } else { 1 }),
        "window.step_fs",
        &format!("a trace of {samples} samples"),
    )?;
    Ok(Solver::new(&scenario.molecule, scenario.temperature_k, scenario.solver)?.with_progress(progress))
}

/// Run `scenario` on `solver` (made by [`solver_for`]): the trace over the window and, with a focal
/// average, the averaged trace. The goal is not scored here (see `design::score::simulate_scored`).
pub fn simulate_with(scenario: &Scenario, solver: &Solver) -> Result<Simulation> {
    let t0 = std::time::Instant::now();
    let times = scenario.window.times_ps();
    let result = solver.run(&scenario.field, &times, true)?;
    let averaged = match &scenario.focal_average {
        None => None,
        Some(avg) => Some(solver.run_focal(&scenario.field, &times, true, avg)?),
    };
    Ok(Simulation {
        averaged,
        goal_score: None,
        scenario: scenario.clone(),
        result,
        discarded_population: solver.discarded_population(),
        partition_function: solver.partition_function(),
        initial_states: solver.initial_states(),
        run_time_s: t0.elapsed().as_secs_f64(),
    })
}
