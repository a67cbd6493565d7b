//! Tops in fields that orient them: static fields and terahertz pulses acting on the permanent dipole,
//! with laser pulses, all along Z (M is conserved). Used for asymmetric tops, with the dipole along
//! any principal axis; symmetric tops take the same path in the tests (their own path, one ladder per
//! (K, M), is faster).
//!
//! The quantization frame puts the dipole axis along z, so the coupling −μE(t) Φ_Zz − ¼E²Σ α_i Φ_Zi²
//! keeps two exact symmetries besides M: the two-fold rotation about the dipole axis (parity of K) and,
//! at M = 0, the reflection σ through a lab plane containing Z, σ|J K 0⟩ = (−1)^K |J −K 0⟩. Each block
//! is one class of these: (M > 0, K parity) — the block of −M is its mirror image and is counted twice —
//! and (M = 0, K parity, σ). Levels of one class never cross as a field grows (von Neumann–Wigner), so a
//! static field on from the start was met adiabatically: the n-th lowest field-free level of a block
//! correlates with its n-th lowest dressed state.
//!
//! States live in the field-free eigenbasis. Every step of a field interval is a fourth-order splitting of
//! free phases and a kick exp(i h (u₂ A + u₁ D)) by Chebyshev series in the function basis, where A is
//! the laser coupling of `TopOps` (spectrum in [0, 1]) and D = Φ_Zz (spectrum in [−1, 1]). A static field
//! makes its whole span one such interval; after it is switched off, stretches are field-free and are
//! sampled from coherences merged by pairs of levels as for tops in laser pulses alone.

use super::driver::{Kernel, ORIENTED_STEP, grow_basis, walk};
use super::top::{AXES, BlockPairs, TopAssembly, TopBlockView, TopOutcome, kick_through_functions, laser_reach};
use super::{BlockReport, Event, RunResult, coupling};
use crate::basis::BlockSymmetry;
use crate::basis::top::{AngularOperator, TopBlock, TopBlockBasis, TopFrame, TopSym};
use crate::ensemble::top::TopEnsemble;
use crate::error::{Error, Result};
use crate::field::FieldModel;
use crate::molecule::Molecule;
use crate::molecule::top::{BodyAxis, Top};
use crate::numeric::{Banded, sorted_eigen};
use crate::observe::{FreeSums, PairParts, ThreeAxisParts, Trace};
use crate::propagate::BlockState;
use crate::propagate::sparse::Csr;
use crate::scenario::SolverSettings;
use crate::units::{cm_to_rad_per_ps, dipole_rate_rad_per_ps};
use nalgebra::DMatrix;
use rayon::prelude::*;
use std::cell::RefCell;
use std::collections::BTreeMap;
use std::sync::Arc;

/// Largest J a block may reach (as for tops in laser pulses).
const MAX_J: i64 = super::top::MAX_TOP_BASIS_J;

/// Observables after the three body axes: ⟨cosθ⟩ and ⟨cos³θ⟩ of the dipole axis.
const COS: usize = AXES;
const COS3: usize = AXES + 1;
/// ⟨cos²θ_2D⟩ of the alignment axis, when built.
const TWO_D: usize = AXES + 2;

/// Operators of one block on one shared sparsity pattern.
struct OrientedOps {
    basis: TopBlockBasis,
    omega: Vec<f64>,
    /// Laser coupling A = Σ (α_i − α_min) Φ_Zi² / Δα (function basis).
    laser: Csr,
    /// Dipole coupling D = Φ_Zz (function basis).
    dipole: Csr,
    /// Two-colour coupling T = Σ β_ijk Φ_Zi Φ_Zj Φ_Zk (β in atomic units; function basis) and the bound
    /// Σ|coefficients| on its spectrum, when the molecule carries a hyperpolarizability tensor.
    hyper: Option<(Csr, f64)>,
    /// The identity on the same pattern.
    identity: Csr,
    /// Φ_Zz between eigenstates (dense), for dressed states.
    dipole_eigen: DMatrix<f64>,
    /// Φ_Za², Φ_Zb², Φ_Zc², Φ_Zz, Φ_Zz³, then |Φ_Z,align| when built for 2D (eigenbasis).
    observables: Vec<Banded>,
    /// Largest angular frequency of a transition either coupling drives, rad/ps.
    fastest: f64,
    /// The last dressed decomposition (rate, energies, vectors): a static field needs it at the start
    /// and again at the end.
    dressed_cache: std::sync::Mutex<Option<(f64, Dressed)>>,
}

/// Dressed energies (ascending) and eigenvectors (columns, eigenbasis) of one block at one field.
type Dressed = Arc<(Vec<f64>, DMatrix<f64>)>;

/// What every block of one run shares.
#[derive(Clone, Copy)]
struct OrientedRun<'a> {
    run: super::driver::Run<'a, Event>,
    /// Dipole rate (rad/ps) of a static field on from the start (0: the run starts field-free).
    s0: f64,
}

impl OrientedOps {
    fn new(top: &Top, frame: &TopFrame, block: TopBlock, with_2d: bool, beta: Option<[f64; 3]>) -> OrientedOps {
        let basis = TopBlockBasis::new(frame, block);
        let omega: Vec<f64> = basis.energies_cm.iter().map(|e| cm_to_rad_per_ps(*e)).collect();
        let axes: Vec<AngularOperator> = (0..AXES).map(|i| AngularOperator::cos2_position(frame.position(BodyAxis::from_index(i)))).collect();
        let a_op = laser_operator(top, frame);
        let cos = AngularOperator::cos_z();
        // cos³θ = (3/5) P₁(cosθ) + (2/5) P₃(cosθ), and D^l₀₀* = P_l(cosθ).
        let cos3 = AngularOperator { identity: 0.0, terms: vec![(1, 0, 0.6), (3, 0, 0.4)] };
        let n = basis.size();
        let (ta, td) = (basis.function_triplets(&a_op), basis.function_triplets(&cos));
        let t_op = beta.map(|b| hyperpolarizability_operator(&b, frame, top.dipole_axis));
        let tt = t_op.as_ref().map(|(op, _)| basis.function_triplets(op)).unwrap_or_default();
        // One pattern for the matrices, so that a step's combination is one pass over the values.
        let positions: Vec<(usize, usize)> = ta.iter().chain(&td).chain(&tt).map(|t| (t.0, t.1)).chain((0..n).map(|i| (i, i))).collect();
        let on_pattern = |own: &[(usize, usize, f64)]| {
            let mut t: Vec<(usize, usize, f64)> = positions.iter().map(|&(r, c)| (r, c, 0.0)).collect();
            t.extend_from_slice(own);
            Csr::from_triplets(n, t)
        };
        let laser = on_pattern(&ta);
        let dipole = on_pattern(&td);
        let hyper = t_op.as_ref().map(|(_, bound)| (on_pattern(&tt), *bound));
        let identity = on_pattern(&(0..n).map(|i| (i, i, 1.0)).collect::<Vec<_>>());
        let mut fastest: f64 = 0.0;
        for op in [&a_op, &cos].into_iter().chain(t_op.as_ref().map(|t| &t.0)) {
            for (r0, c0, blk) in &basis.operator_banded(op).blocks {
                for c in 0..blk.ncols() {
                    for r in 0..blk.nrows() {
                        if blk[(r, c)].abs() > 1e-3 {
                            fastest = fastest.max((omega[r0 + r] - omega[c0 + c]).abs());
                        }
                    }
                }
            }
        }
        let mut observables: Vec<Banded> = axes.iter().map(|o| basis.operator_banded(o)).collect();
        observables.push(basis.operator_banded(&cos));
        observables.push(basis.operator_banded(&cos3));
        if with_2d {
            observables.push(Banded::dense(basis.abs_direction_cosine(frame.position(top.alignment_axis))));
        }
        let dipole_eigen = basis.operator(&cos);
        OrientedOps { basis, omega, laser, dipole, hyper, identity, dipole_eigen, observables, fastest, dressed_cache: Default::default() }
    }

    /// Exact kick exp(i(θ_A A + θ_D D + θ_T T)) (up to a global phase): the generator is shifted and scaled to
    /// a spectrum in [0, 1] for the Chebyshev series, written into `combined` (a matrix on the same pattern).
    /// A compression of a function of the orientation has its spectrum inside the function's range, so
    /// |T| ≤ Σ|coefficients| bounds the two-colour part.
    fn kick(&self, state: &mut BlockState, theta_a: f64, theta_d: f64, theta_t: f64, combined: &mut Csr) {
        let t_width = self.hyper.as_ref().map(|h| theta_t.abs() * h.1).unwrap_or(0.0);
        let lo = theta_a.min(0.0) - theta_d.abs() - t_width;
        let hi = theta_a.max(0.0) + theta_d.abs() + t_width;
        let width = hi - lo;
        if width == 0.0 {
            return;
        }
        let mut parts = vec![(&self.laser, theta_a / width), (&self.dipole, theta_d / width), (&self.identity, -lo / width)];
        if let Some((t, _)) = &self.hyper {
            parts.push((t, theta_t / width));
        }
        combined.set_combination(&parts);
        kick_through_functions(&self.basis, combined, state, width);
    }

    /// Dressed states of H0 − s Φ_Zz (s in rad/ps): energies ascending and eigenvectors (eigenbasis).
    fn dressed(&self, s: f64) -> Dressed {
        if let Some((rate, d)) = self.dressed_cache.lock().expect("dressed cache").as_ref()
            && *rate == s
        {
            return d.clone();
        }
        let n = self.omega.len();
        let h = DMatrix::from_fn(n, n, |r, c| if r == c { self.omega[r] } else { 0.0 } - s * self.dipole_eigen[(r, c)]);
        let d = Arc::new(sorted_eigen(h));
        *self.dressed_cache.lock().expect("dressed cache") = Some((s, d.clone()));
        d
    }

    /// Number of eigenstates in the top two J values of the basis.
    fn edge_states(&self) -> usize {
        self.basis.j_ranges.iter().rev().take(2).map(|x| x.2).sum()
    }
}

/// A thermal level of the ensemble as primitive amplitudes {K → c} at one J, with its population.
#[derive(Clone)]
struct Start {
    j: i64,
    amplitudes: Vec<(i64, f64)>,
    population: f64,
}

/// One block to run: its class, how many identical blocks it stands for, and its thermal levels.
struct OrientedBlock {
    m: i64,
    sym: TopSym,
    weight: f64,
    starts: Vec<Start>,
}

/// Solver for a top in orienting fields along Z (frame: dipole axis along z).
pub struct OrientedTopSolver {
    top: Top,
    /// The dipole axis and the constants of its coupling to the fields (β∥, β⊥ left at zero: the
    /// two-colour coupling is the operator T built from `beta`).
    axis: super::coupling::CoupledAxis,
    /// β_dgg by body axis (atomic units), when the molecule carries them.
    beta: Option<[f64; 3]>,
    frame: TopFrame,
    blocks: Vec<OrientedBlock>,
    /// The blocks in which a symmetric top's levels are dressed by a static field: one K each, since K is
    /// conserved and levels of different K cross freely (None for asymmetric tops: `blocks`).
    dressing: Option<Vec<OrientedBlock>>,
    thermal_j_max: i64,
    settings: SolverSettings,
    pub(super) progress: Arc<super::RunProgress>,
}

impl OrientedTopSolver {
    /// A solver for `molecule` (a top) at `temperature_k`.
    pub fn new(molecule: &Molecule, temperature_k: f64, settings: SolverSettings) -> Result<OrientedTopSolver> {
        let top = molecule.as_top().cloned().ok_or_else(|| Error::Numerical("the oriented-top path needs a top".into()))?;
        let frame = TopFrame::new(&top, true);
        let ensemble = TopEnsemble::new(&top, &frame, temperature_k, settings.thermal_tolerance)?;
        let blocks = oriented_blocks(&frame, &ensemble);
        let mut axis = super::coupling::CoupledAxis::of(molecule);
        axis.beta_parallel_au = 0.0;
        axis.beta_perpendicular_au = 0.0;
        let dressing = frame.symmetric.then(|| class_blocks(&frame, &ensemble, true));
        Ok(OrientedTopSolver {
            top,
            axis,
            beta: molecule.top_beta_au(),
            frame,
            blocks,
            dressing,
            thermal_j_max: ensemble.j_max,
            settings,
            progress: Default::default(),
        })
    }

    /// The bound on the two-colour operator T (per unit rate), 0 without a hyperpolarizability.
    fn two_colour_bound(&self) -> f64 {
        self.beta.map(|b| hyperpolarizability_operator(&b, &self.frame, self.top.dipole_axis).1).unwrap_or(0.0)
    }

    /// Dipole coupling rate μE/ħ (rad/ps) of the static field at t.
    fn static_rate(&self, field: &FieldModel, t_ps: f64) -> f64 {
        field.static_field.map(|s| dipole_rate_rad_per_ps(self.axis.dipole_debye, s.along_z_at(t_ps))).unwrap_or(0.0)
    }

    /// Finite intervals covering every field element and the span of the static field, from `t_first`
    /// to the last sample (the static field then stays on past it), with their default steps. With
    /// `solver.method` "kick" every laser pulse is instead a kick (at its quadrature nodes), and the
    /// intervals of the other fields are split at the kicks.
    pub(super) fn schedule(&self, field: &FieldModel, t_first: f64, t_last: f64) -> Vec<Event> {
        let kick_mode = self.settings.method == crate::scenario::Method::Kick;
        let mut kicks: Vec<Event> = vec![];
        // The fields the finite intervals hold (in kick mode: all but the laser pulses).
        let finite_field = if kick_mode {
            for (i, p) in field.pulses.iter().enumerate().filter(|(_, p)| p.peak_intensity_wcm2 > 0.0) {
                kicks.extend(super::pulse_kicks(p, i, self.axis.delta_alpha_a3, self.settings.kick_nodes));
            }
            FieldModel { pulses: vec![], ..field.clone() }
        } else {
            field.clone()
        };
        let field = &finite_field;
        let mut spans: Vec<(f64, f64)> = field.all_intervals().iter().map(|&(a, b, _)| (a, b)).collect();
        if let Some(sf) = field.static_field.filter(|s| s.strength_kv_cm != 0.0) {
            let on = sf.on_ps.unwrap_or(t_first).max(t_first);
            let off = sf.off_ps.unwrap_or(f64::INFINITY).min(t_last);
            if off > on {
                spans.push((on, off));
            }
        }
        spans.sort_by(|a, b| a.0.total_cmp(&b.0));
        let mut merged: Vec<(f64, f64)> = vec![];
        for (a, b) in spans {
            match merged.last_mut() {
                Some(last) if a <= last.1 => last.1 = last.1.max(b),
                _ => merged.push((a, b)),
            }
        }
        let overlaps = |(a, b): (f64, f64), lo: f64, hi: f64| a <= hi && b >= lo;
        let mut events: Vec<Event> = vec![];
        for (lo, hi) in merged {
            let pulses: Vec<usize> =
                (0..field.pulses.len()).filter(|&i| field.pulses[i].peak_intensity_wcm2 > 0.0 && overlaps(field.pulses[i].support_ps(), lo, hi)).collect();
            let shortest = pulses
                .iter()
                .map(|&i| field.pulses[i].time_scale_ps())
                .chain(field.terahertz.iter().filter(|t| overlaps(t.support_ps(), lo, hi)).map(|t| t.rms_duration_ps()))
                .fold(f64::INFINITY, f64::min);
            let mut peak: f64 = 0.0;
            let t_bound = self.two_colour_bound();
            for k in 0..=400 {
                let r = coupling::rates(field, lo + (hi - lo) * k as f64 / 400.0, &self.axis);
                peak = peak.max(r.u1.abs() + r.u2.abs() + r.g3.abs() * t_bound);
            }
            let step_ps = ORIENTED_STEP.step_ps(&self.settings, shortest, 0.0, peak);
            // Split at the kicks inside (a kick is an instant between two pieces of the interval).
            let mut cuts: Vec<f64> = kicks.iter().map(|k| k.span().0).filter(|&t| t > lo && t < hi).collect();
            cuts.sort_by(f64::total_cmp);
            cuts.dedup();
            let mut start = lo;
            for end in cuts.into_iter().chain(std::iter::once(hi)) {
                events.push(Event::Finite { start_ps: start, end_ps: end, pulses: pulses.clone(), step_ps });
                start = end;
            }
        }
        events.extend(kicks);
        // Time order; a kick at the end of a piece comes after it and before the next piece.
        events.sort_by(|a, b| a.span().0.total_cmp(&b.span().0).then(a.span().1.total_cmp(&b.span().1)));
        events
    }

    /// Room (in J) above the thermal levels: the laser kicks, the static-field mixing (about
    /// sqrt(μE/C) levels) and the terahertz field areas.
    pub(super) fn reach(&self, field: &FieldModel) -> Result<i64> {
        // Two-colour pulses align through the polarizability of both colours as one laser pulse would.
        let mut aligning = field.clone();
        aligning.pulses.extend(
            field
                .two_colour
                .iter()
                .map(|t| crate::field::Pulse { peak_intensity_wcm2: t.fundamental_intensity_wcm2 + t.second_harmonic_intensity_wcm2, ..t.envelope_pulse() }),
        );
        let lasers = if aligning.pulses.iter().any(|p| p.peak_intensity_wcm2 > 0.0) {
            laser_reach(&self.top, self.thermal_j_max, &aligning).map_err(|e| match e {
                // Name the input that drives the basis when a two-colour pulse takes part.
                Error::Input { message, .. } if !field.two_colour.is_empty() => Error::input("two_colour", message),
                other => other,
            })?
        } else {
            0
        };
        // The hyperpolarizability kicks: ∫ g3 dt times the bound on T, as the dipole kicks of terahertz pulses.
        let t_bound = self.two_colour_bound();
        let hyper: f64 = field
            .two_colour
            .iter()
            .map(|t| {
                use crate::units::{BETA_AU, HBAR, peak_field_v_per_m};
                let (e1, e2) = (peak_field_v_per_m(t.fundamental_intensity_wcm2), peak_field_v_per_m(t.second_harmonic_intensity_wcm2));
                (0.125 * e1 * e1 * e2 * t.phase_rad.cos() * BETA_AU / HBAR * 1e-12 * t.three_halves_area_ps()).abs() * t_bound
            })
            .sum();
        let c_rate = cm_to_rad_per_ps(self.top.c_cm);
        let s_max = field.static_field.map(|s| dipole_rate_rad_per_ps(self.axis.dipole_debye, s.strength_kv_cm).abs()).unwrap_or(0.0);
        let thz: f64 = field.terahertz.iter().map(|t| dipole_rate_rad_per_ps(self.axis.dipole_debye, t.field_areas().0).abs()).sum();
        Ok(lasers + (2.0 * (s_max / c_rate).sqrt()).ceil() as i64 + (1.5 * (thz + hyper)).ceil() as i64 + 4)
    }

    /// The schedule of a run sampled at `times_ps` and the time it starts: one finite interval over each
    /// stretch where the static field or a pulse is on (the static field stays on past the last sample,
    /// so the interval ends just after it); refuses more steps than `solver.max_steps`.
    pub(super) fn plan(&self, field: &FieldModel, times_ps: &[f64]) -> Result<(Vec<Event>, f64)> {
        let elements = field.all_intervals();
        let first_element = elements.first().map(|s| s.0);
        let t_first = first_element.into_iter().chain(times_ps.first().copied()).fold(f64::INFINITY, f64::min);
        let t_first = if t_first.is_finite() { t_first } else { 0.0 };
        let last_element = elements.iter().map(|s| s.1).fold(t_first, f64::max);
        // The static field stays on past the last sample: the interval ends just after it.
        let t_last = times_ps.last().copied().unwrap_or(t_first).max(last_element) + 1e-6;
        let events = self.schedule(field, t_first, t_last);
        let steps: f64 =
            events.iter().map(|e| if let Event::Finite { start_ps, end_ps, step_ps, .. } = e { ((end_ps - start_ps) / step_ps).ceil() } else { 0.0 }).sum();
        if steps > self.settings.max_steps {
            return Err(Error::input(
                if self.settings.step_fs.is_some() { "solver.step_fs" } else { "window.stop_ps" },
                format!(
                    "the static field and pulses need about {steps:.2e} time steps here, more than solver.max_steps = {:.0e}; expected a shorter window, a larger step or a higher max_steps (with --allow-long)",
                    self.settings.max_steps
                ),
            ));
        }
        Ok((events, t_first))
    }

    /// Run `field` and sample the observables at `times_ps` (ascending).
    pub fn run(&self, field: &FieldModel, times_ps: &[f64], with_2d: bool) -> Result<RunResult> {
        if !field.two_colour.is_empty() && self.beta.is_none() {
            return Err(Error::input(
                "molecule.beta_au",
                "a two-colour pulse on a top needs its hyperpolarizability components (beta_au in an inline molecule)",
            ));
        }
        let reach = self.reach(field)?;
        let (events, t_first) = self.plan(field, times_ps)?;
        let s0 = field
            .static_field
            .filter(|s| s.on_ps.is_none() && s.off_ps.is_none_or(|o| o >= t_first))
            .map(|s| dipole_rate_rad_per_ps(self.axis.dipole_debye, s.along_z()))
            .unwrap_or(0.0);
        let nobs = TWO_D + usize::from(with_2d);
        // In kick mode the laser pulses are the schedule's kicks: the finite intervals hold the other fields.
        let kicked = (self.settings.method == crate::scenario::Method::Kick).then(|| FieldModel { pulses: vec![], ..field.clone() });
        let plan = OrientedRun { run: super::driver::Run { field: kicked.as_ref().unwrap_or(field), items: &events, times: times_ps, t_first }, s0 };
        let mut assembly = TopAssembly::new(nobs, times_ps.len());
        self.progress.plan(self.blocks.len());
        let group = 8 * rayon::current_num_threads().max(1);
        for blocks in self.blocks.chunks(group) {
            let outcomes: Vec<TopOutcome> = blocks
                .par_iter()
                .map(|b| {
                    let r = grow_basis(
                        (b.starts.iter().map(|s| s.j).max().unwrap_or(0) + reach) as usize,
                        MAX_J as usize,
                        |j_max| {
                            let ops = OrientedOps::new(&self.top, &self.frame, TopBlock { m: b.m, sym: b.sym, j_max: j_max as i64 }, with_2d, self.beta);
                            self.try_block(&ops, b, &plan)
                        },
                        || {
                            Error::Numerical(format!(
                                "block M = {}, {:?}: the basis would need J > {MAX_J}; lower the field strengths or the temperature",
                                b.m, b.sym
                            ))
                        },
                    );
                    self.progress.finish_one();
                    r
                })
                .collect::<Result<Vec<_>>>()?;
            for o in outcomes {
                assembly.add(o);
            }
        }
        let (values, final_sums, statics, reports) = assembly.finish(times_ps, t_first);
        let align = self.top.alignment_axis.index();
        let second = self.top.second_axis().index();
        let parts =
            PairParts { cos2: align, cos2_2d: with_2d.then_some(TWO_D), three_axis: Some(ThreeAxisParts { along_z: align, second, second_from_z: true }) };
        // Symmetric about Z: ⟨Φ_Xg²⟩ = (1 − ⟨Φ_Zg²⟩)/2.
        let three_axis = values[align].iter().zip(&values[second]).map(|(a, b)| a.min(0.5 * (1.0 - b))).collect();
        let trace = Trace {
            times_ps: times_ps.to_vec(),
            cos2: values[align].clone(),
            cos2_2d: with_2d.then(|| values[TWO_D].clone()),
            orientation: Some(crate::observe::Orientation { cos: values[COS].clone(), cos3: Some(values[COS3].clone()) }),
            body_axes: Some(crate::observe::BodyAxes { a: values[0].clone(), b: values[1].clone(), c: values[2].clone(), three_axis, ..Default::default() }),
            ..Default::default()
        };
        Ok(RunResult {
            trace,
            permanent_cos2: statics[align],
            permanent_cos2_2d: if with_2d { statics[TWO_D] } else { 0.0 },
            blocks: reports,
            events,
            final_sums: FreeSums::Pairs { sums: final_sums, parts },
            permanent_cos: Some(statics[COS]),
        })
    }

    fn try_block(&self, ops: &OrientedOps, b: &OrientedBlock, plan: &OrientedRun) -> Result<Option<TopOutcome>> {
        let OrientedRun { run: super::driver::Run { field, items: events, times, t_first }, s0 } = *plan;
        let basis = &ops.basis;
        let n = basis.size();
        let p = block_populations(basis, &b.starts);
        let levels: Vec<usize> = (0..n).filter(|&i| p[i] > 1e-300).collect();
        if levels.is_empty() {
            return Ok(Some(self.empty_outcome(ops, b, times.len())));
        }
        let pops: Vec<f64> = levels.iter().map(|&i| p[i]).collect();
        let state = if s0 != 0.0 { BlockState::from_columns(&dressed_columns(ops, &levels, s0), t_first) } else { BlockState::new(n, &levels, t_first) };
        let kernel = OrientedKernel {
            solver: self,
            ops,
            view: TopBlockView::new(&ops.omega, &ops.observables, pops.clone(), b.weight, ops.edge_states()),
            field,
            combined: RefCell::new(ops.identity.clone()),
        };
        let Some(w) = walk(&kernel, state, events, times, self.settings.edge_tolerance) else {
            return Ok(None);
        };
        let t_end = w.state.t_ps;
        let s_end = self.static_rate(field, t_end);
        let mut gaps: Vec<_> = w.stretches.into_iter().map(|(r, t, pairs)| (r.start, r.end, t, pairs)).collect();
        let (final_pairs, dressed_statics) = if s_end == 0.0 {
            let fin = (t_end, kernel.stretch(&w.state));
            if !w.rest.is_empty() {
                gaps.push((w.rest.start, w.rest.end, fin.0, fin.1.clone()));
            }
            (Some(fin), None)
        } else {
            (None, Some(dressed_averages(ops, &w.state, &pops, s_end)))
        };
        let report = BlockReport {
            m: b.m as u32,
            parity: BlockSymmetry::of_top_class(b.sym, &self.frame),
            j_max: basis.block.j_max as u32,
            size: n,
            edge_population: w.edge,
        };
        Ok(Some(TopOutcome {
            values: w.values,
            gaps,
            final_pairs,
            sym: b.sym,
            j_ranges: basis.j_ranges.clone(),
            omega: ops.omega.clone(),
            report,
            weight: b.weight,
            dressed_statics,
        }))
    }

    /// The outcome of a block without population (all its levels have zero spin weight).
    fn empty_outcome(&self, ops: &OrientedOps, b: &OrientedBlock, samples: usize) -> TopOutcome {
        let nobs = ops.observables.len();
        TopOutcome {
            values: vec![vec![0.0; samples]; nobs],
            gaps: vec![],
            final_pairs: None,
            sym: b.sym,
            j_ranges: ops.basis.j_ranges.clone(),
            omega: ops.omega.clone(),
            report: BlockReport {
                m: b.m as u32,
                parity: BlockSymmetry::of_top_class(b.sym, &self.frame),
                j_max: ops.basis.block.j_max as u32,
                size: ops.basis.size(),
                edge_population: 0.0,
            },
            weight: 0.0,
            dressed_statics: None,
        }
    }
}

/// A thermal level after the static field it arrived in, as primitive amplitudes {(J, K) → c} at M = `m`
/// of the frame with the dipole along z and the field along Z; `population` includes the number of
/// identical blocks the level's block stands for (2 for M > 0: the mirror level at −M).
pub(super) struct DressedStart {
    pub m: i64,
    pub amplitudes: Vec<((i64, i64), f64)>,
    pub population: f64,
    /// J and name of the field-free level.
    pub j: i64,
    pub label: String,
}

impl OrientedTopSolver {
    /// The frame (dipole along z) of this solver.
    pub(super) fn frame(&self) -> &TopFrame {
        &self.frame
    }

    /// The top's constants.
    pub(super) fn top(&self) -> &Top {
        &self.top
    }

    /// Highest J of the thermal ensemble.
    pub(super) fn thermal_j_max(&self) -> i64 {
        self.thermal_j_max
    }

    /// The solver settings.
    pub(super) fn settings(&self) -> &SolverSettings {
        &self.settings
    }

    /// The dipole axis and its coupling constants.
    pub(super) fn axis(&self) -> &super::coupling::CoupledAxis {
        &self.axis
    }

    /// Every thermal level of the ensemble dressed by a static field along Z of dipole rate `s0` (rad/ps;
    /// 0: field-free levels) by adiabatic correlation within its class — M, the parity of K (K itself for
    /// a symmetric top) and at M = 0 the reflection (the n-th lowest field-free level of a block becomes
    /// its n-th lowest dressed state), each block's basis grown until the dressed
    /// states hold less than the edge tolerance in their top two J values.
    pub(super) fn dressed_starts(&self, s0: f64) -> Result<Vec<DressedStart>> {
        let c_rate = cm_to_rad_per_ps(self.top.c_cm);
        let room = (2.0 * (s0.abs() / c_rate).sqrt()).ceil() as i64 + 4;
        let names = if self.frame.symmetric { vec![] } else { level_names(&self.top, self.thermal_j_max) };
        let per_block: Vec<Vec<DressedStart>> = self
            .dressing
            .as_ref()
            .unwrap_or(&self.blocks)
            .par_iter()
            .map(|b| {
                let first = b.starts.iter().map(|s| s.j).max().unwrap_or(0) + room;
                grow_basis(
                    first as usize,
                    MAX_J as usize,
                    |j_max| {
                        let ops = OrientedOps::new(&self.top, &self.frame, TopBlock { m: b.m, sym: b.sym, j_max: j_max as i64 }, false, None);
                        Ok(dressed_block_starts(&ops, b, s0, self.settings.edge_tolerance, &names))
                    },
                    || Error::Numerical(format!("block M = {}, {:?}: the static-field dressed states would need J > {MAX_J}", b.m, b.sym)),
                )
            })
            .collect::<Result<_>>()?;
        Ok(per_block.into_iter().flatten().collect())
    }
}

/// The dressed states (columns, eigenbasis) of H0 − s0 Φ_Zz that the field-free `levels` of a block
/// correlate with: the n-th lowest field-free level of the class becomes its n-th lowest dressed state.
fn dressed_columns(ops: &OrientedOps, levels: &[usize], s0: f64) -> DMatrix<f64> {
    let n = ops.omega.len();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&x, &y| ops.omega[x].total_cmp(&ops.omega[y]).then(x.cmp(&y)));
    let mut rank = vec![0; n];
    for (r, &i) in order.iter().enumerate() {
        rank[i] = r;
    }
    let dressed = ops.dressed(s0);
    let mut cols = DMatrix::zeros(n, levels.len());
    for (c, &i) in levels.iter().enumerate() {
        cols.set_column(c, &dressed.1.column(rank[i]));
    }
    cols
}

/// The dressed (or, for `s0` = 0, field-free) thermal levels of one block, None when a dressed state
/// reaches the basis edge.
fn dressed_block_starts(ops: &OrientedOps, b: &OrientedBlock, s0: f64, tolerance: f64, names: &[(i64, f64, String)]) -> Option<Vec<DressedStart>> {
    let basis = &ops.basis;
    let n = basis.size();
    let p = block_populations(basis, &b.starts);
    let levels: Vec<usize> = (0..n).filter(|&i| p[i] > 1e-300).collect();
    let cols = if s0 != 0.0 {
        dressed_columns(ops, &levels, s0)
    } else {
        let mut c = DMatrix::zeros(n, levels.len());
        for (k, &i) in levels.iter().enumerate() {
            c[(i, k)] = 1.0;
        }
        c
    };
    let edge = ops.edge_states();
    for c in 0..levels.len() {
        if (n - edge..n).map(|r| cols[(r, c)].powi(2)).sum::<f64>() > tolerance {
            return None;
        }
    }
    let mut out = vec![];
    for (c, &i) in levels.iter().enumerate() {
        let mut amps: Vec<((i64, i64), f64)> = vec![];
        for (r, &(j, start, len)) in basis.j_ranges.iter().enumerate() {
            let v = &basis.vectors[r];
            for f in 0..len {
                let a: f64 = (0..len).map(|e| v[(f, e)] * cols[(start + e, c)]).sum();
                if a == 0.0 {
                    continue;
                }
                let (comps, nc) = basis.functions[start + f].components();
                amps.extend(comps[..nc].iter().map(|&(k, w)| ((j, k), w * a)));
            }
        }
        let j = basis.j_ranges.iter().find(|r| i >= r.1 && i < r.1 + r.2).map(|r| r.0).unwrap_or(0);
        let label = level_label(names, b.sym, j, basis.energies_cm[i]);
        out.push(DressedStart { m: b.m, amplitudes: amps, population: p[i] * b.weight, j, label });
    }
    Some(out)
}

/// Time averages of the observables of a block left in a static field (rate `s` rad/ps): the diagonal
/// of the density matrix in the dressed states times the observables' dressed diagonal (coherences
/// between dressed states average out), per unit block weight.
fn dressed_averages(ops: &OrientedOps, state: &BlockState, pops: &[f64], s: f64) -> Vec<f64> {
    let dressed = ops.dressed(s);
    let vecs = &dressed.1;
    let k = state.k;
    let re = vecs.transpose() * state.psi.columns(0, k);
    let im = vecs.transpose() * state.psi.columns(k, k);
    let n = vecs.ncols();
    let q: Vec<f64> = (0..n).map(|i| (0..k).map(|c| pops[c] * (re[(i, c)].powi(2) + im[(i, c)].powi(2))).sum()).collect();
    ops.observables
        .iter()
        .map(|o| {
            // Only the diagonal of Sᵀ O S is needed: (O S)_i · S_i.
            let os = o.to_dense() * vecs;
            (0..n).map(|i| q[i] * vecs.column(i).dot(&os.column(i))).sum()
        })
        .collect()
}

/// The blocks of a run and their thermal levels, from the ensemble of the frame with the dipole along z
/// (Wang classes of asymmetric tops, fixed K of symmetric tops): every level, written as primitive
/// amplitudes, goes to the blocks of its M and K parity (at M = 0, to the reflection class or classes
/// it has a part in).
fn oriented_blocks(frame: &TopFrame, ensemble: &TopEnsemble) -> Vec<OrientedBlock> {
    let mut map: BTreeMap<(i64, i64, i64), OrientedBlock> = BTreeMap::new();
    for bp in &ensemble.blocks {
        let source = TopBlockBasis::new(frame, TopBlock { m: bp.m, sym: bp.sym, j_max: bp.levels.last().map(|l| l.0).unwrap_or(0) });
        for &(j, idx, pop) in &bp.levels {
            let amps = level_amplitudes(&source, j, idx);
            // A symmetric top's K > 0 level stands for ±K (the ensemble counts it twice).
            let mut columns = vec![amps.clone()];
            if let TopSym::K(k) = bp.sym
                && k > 0
            {
                columns = vec![vec![(k, 1.0)], vec![(-k, 1.0)]];
            }
            let k_parity = amps.first().map(|a| a.0.rem_euclid(2)).unwrap_or(0);
            let targets: Vec<(TopSym, f64)> = if bp.m > 0 {
                vec![(TopSym::KParity(k_parity), 2.0)]
            } else {
                [1, -1].iter().map(|&sigma| (TopSym::Reflection { k_parity, sigma }, 1.0)).collect()
            };
            for (sym, weight) in targets {
                let target = TopBlock { m: bp.m, sym, j_max: j };
                let funcs = target.functions_of_j(j);
                for col in &columns {
                    // Keep only the part of the level inside this class (all of it, or none, except for
                    // a symmetric top's |±K⟩, which splits evenly between σ = ±1).
                    let norm2: f64 = funcs
                        .iter()
                        .map(|f| {
                            let (comps, nc) = f.components();
                            comps[..nc].iter().map(|&(k, c)| c * col.iter().filter(|a| a.0 == k).map(|a| a.1).sum::<f64>()).sum::<f64>().powi(2)
                        })
                        .sum();
                    if norm2 < 1e-12 {
                        continue;
                    }
                    let key = (bp.m, sym_key(sym).0, sym_key(sym).1);
                    let entry = map.entry(key).or_insert_with(|| OrientedBlock { m: bp.m, sym, weight, starts: vec![] });
                    entry.starts.push(Start { j, amplitudes: col.clone(), population: pop });
                }
            }
        }
    }
    map.into_values().collect()
}

/// Thermal populations of a block's eigenstates: ρ = Σ p |start⟩⟨start| in the eigenbasis. Levels are
/// non-degenerate within a class or degenerate with equal populations, so ρ is diagonal there: p_n = ρ_nn.
fn block_populations(basis: &TopBlockBasis, starts: &[Start]) -> Vec<f64> {
    let mut p = vec![0.0; basis.size()];
    for s in starts {
        let Some(r) = basis.j_ranges.iter().position(|r| r.0 == s.j) else { continue };
        let (_, start, len) = basis.j_ranges[r];
        let f: Vec<f64> = (0..len)
            .map(|i| {
                let (comps, nc) = basis.functions[start + i].components();
                comps[..nc].iter().map(|&(k, c)| c * s.amplitudes.iter().find(|a| a.0 == k).map(|a| a.1).unwrap_or(0.0)).sum()
            })
            .collect();
        let v = &basis.vectors[r];
        for e in 0..len {
            let c: f64 = (0..len).map(|i| v[(i, e)] * f[i]).sum();
            p[start + e] += s.population * c * c;
        }
    }
    p
}

/// The laser coupling A = Σ (α_i − α_min) Φ_Zi² / Δα of a top in `frame` (its rate is 2π Δα I/(cħ)).
/// The two-colour coupling Σ β_ijk Φ_Zi Φ_Zj Φ_Zk of a top whose dipole axis d is a two-fold axis (C2v):
/// with Kleinman symmetry only β_ddd and β_dgg = β_gdg = β_ggd survive, so it is
/// β_ddd Φ_Zd³ + 3 Σ_{g≠d} β_dgg Φ_Zd Φ_Zg², in the frame whose z is the dipole axis; and Σ|coefficients|,
/// a bound on its range (|Φ| ≤ 1). `beta` holds β_dgg by body axis g = a, b, c.
fn hyperpolarizability_operator(beta: &[f64; 3], frame: &TopFrame, dipole: BodyAxis) -> (AngularOperator, f64) {
    let mut op = AngularOperator { identity: 0.0, terms: vec![] };
    let mut bound = 0.0;
    for (i, &b) in beta.iter().enumerate() {
        let g = BodyAxis::from_index(i);
        let (term, w) = if g == dipole {
            (AngularOperator::cos3_z(), 1.0)
        } else {
            (AngularOperator::cos_z().times(&AngularOperator::cos2_position(frame.position(g))), 3.0)
        };
        op.identity += w * b * term.identity;
        op.terms.extend(term.terms.iter().map(|&(r, q, c)| (r, q, w * b * c)));
        bound += (w * b).abs();
    }
    (op, bound)
}

fn laser_operator(top: &Top, frame: &TopFrame) -> AngularOperator {
    let da = top.delta_alpha_a3();
    let a_min = top.polarizability_a3.iter().cloned().fold(f64::MAX, f64::min);
    let mut a_op = AngularOperator { identity: 0.0, terms: vec![] };
    for i in 0..AXES {
        let o = AngularOperator::cos2_position(frame.position(BodyAxis::from_index(i)));
        let w = if da > 0.0 { (top.polarizability_a3[i] - a_min) / da } else { 0.0 };
        a_op.identity += w * o.identity;
        a_op.terms.extend(o.terms.iter().map(|&(r, q, c)| (r, q, w * c)));
    }
    a_op
}

/// The `idx`-th field-free level at J of a block as primitive amplitudes {K → c}.
fn level_amplitudes(source: &TopBlockBasis, j: i64, idx: usize) -> Vec<(i64, f64)> {
    let (r, &(_, start, len)) = source.j_ranges.iter().enumerate().find(|(_, r)| r.0 == j).expect("thermal level inside its block");
    let v = &source.vectors[r];
    let mut amps = vec![];
    for i in 0..len {
        let (comps, nc) = source.functions[start + i].components();
        amps.extend(comps[..nc].iter().map(|&(k, c)| (k, c * v[(i, idx)])));
    }
    amps
}

/// (K parity, σ or 0) of a block class, for ordering.
fn sym_key(sym: TopSym) -> (i64, i64) {
    match sym {
        TopSym::KParity(p) => (p, 0),
        TopSym::Reflection { k_parity, sigma } => (k_parity, sigma),
        _ => (-1, 0),
    }
}

/// One block of a top in orienting fields.
struct OrientedKernel<'a> {
    solver: &'a OrientedTopSolver,
    ops: &'a OrientedOps,
    view: TopBlockView<'a>,
    field: &'a FieldModel,
    /// The step's combined coupling, rewritten in place (one pattern with A, D and the identity).
    combined: RefCell<Csr>,
}

impl Kernel for OrientedKernel<'_> {
    type Item = Event;
    type Stretch = BlockPairs;

    fn observables(&self) -> usize {
        self.view.observables()
    }

    fn omega(&self) -> &[f64] {
        self.view.omega()
    }

    fn edge(&self, state: &BlockState) -> f64 {
        self.view.edge(state)
    }

    fn sample(&self, st: &BlockState, out: &mut [f64]) {
        self.view.sample(st, out)
    }

    fn stretch(&self, st: &BlockState) -> BlockPairs {
        self.view.stretch(st)
    }

    fn free(&self, st: &mut BlockState, _index: usize, dt: f64) {
        self.view.free(st, dt)
    }

    fn instant(&self, st: &mut BlockState, item: &Event) {
        // A laser pulse as a kick (solver.method "kick"): its whole area at once.
        if let Event::Kick { strength, .. } = item {
            self.ops.kick(st, *strength, 0.0, 0.0, &mut self.combined.borrow_mut());
        }
    }

    fn finite_kick(&self, _index: usize, _item: &Event, st: &mut BlockState, t: f64, h: f64) {
        let r = coupling::rates(self.field, t, &self.solver.axis);
        self.ops.kick(st, h * r.u2, h * r.u1, h * r.g3, &mut self.combined.borrow_mut());
    }

    fn breaks(&self, item: &Event) -> Vec<f64> {
        let mut b = item.breaks(self.field);
        if let Some(sf) = self.field.static_field {
            b.extend(sf.on_ps.into_iter().chain(sf.off_ps));
        }
        b
    }

    fn step(&self, step_ps: f64) -> f64 {
        ORIENTED_STEP.in_block(&self.solver.settings, step_ps, self.ops.fastest)
    }
}

/// One dressed state of a top in constant fields along Z.
#[derive(Debug, Clone, PartialEq)]
pub struct TopDressedState {
    /// M (≥ 0; −M behaves the same).
    pub m: i64,
    /// J of the field-free level the state connects to adiabatically.
    pub j: i64,
    /// That level's name: "J Ka Kc" of an asymmetric top, "J K" of a symmetric top.
    pub label: String,
    /// Energy, cm⁻¹ (field-free ground level 0; without the isotropic polarizability shift).
    pub energy_cm: f64,
    /// ⟨cos²θ⟩ of the alignment axis with Z.
    pub cos2: f64,
    /// ⟨cosθ⟩ of the dipole axis with Z (0 without a static field).
    pub cos: f64,
    /// ⟨cosθ⟩ of the dipole axis with X (0 unless the static field is tilted).
    pub cos_x: f64,
    /// In a tilted static field, the state's sign under the reflection σ' through the lab XZ plane
    /// (combined with a body reflection); M then stands for |M_f| about the static field's axis.
    pub reflection: Option<i64>,
    /// Thermal population of the field-free level, all the blocks it stands for together.
    pub population: f64,
}

/// Dressed (pendular) states of a top and their thermal adiabatic averages.
#[derive(Debug, Clone)]
pub struct TopPendular {
    /// The populated dressed states, by M then energy.
    pub states: Vec<TopDressedState>,
    /// Σ population × ⟨cos²θ⟩ of the alignment axis.
    pub thermal_cos2: f64,
    /// Σ population × ⟨cosθ⟩ of the dipole axis.
    pub thermal_cos: f64,
    /// Σ population × ⟨cosθ⟩ of the dipole axis with X (a tilted static field only).
    pub thermal_cos_x: Option<f64>,
    /// Population left out of the thermal ensemble.
    pub discarded_population: f64,
}

/// What every block of one pendular computation shares.
struct DressedSetting<'a> {
    top: &'a Top,
    frame: &'a TopFrame,
    /// Laser rate (of the operator A) and dipole rate, cm⁻¹.
    u2_cm: f64,
    s_cm: f64,
    /// cos² of the alignment axis with Z.
    align: AngularOperator,
    /// Names of the field-free levels of an asymmetric top (empty for a symmetric top).
    names: Vec<(i64, f64, String)>,
}

/// Dressed states of a top (`molecule`) in a constant laser intensity (W/cm², polarized along Z) and a
/// static field (kV/cm) along Z, each connected adiabatically to the field-free level of the same rank
/// within its exact symmetry class: levels of different classes cross freely as the fields grow, levels of
/// one class never (the von Neumann–Wigner non-crossing rule). The classes: with a static field, M, the
/// two-fold rotation about the dipole axis (K parity in the dipole frame) and at M = 0 the reflection σ
/// (an asymmetric top), or K and M (a symmetric top, whose ±K split in the field); without one, M and the
/// Wang classes (D2) of an asymmetric top, or K of a symmetric top. Thermal populations at
/// `temperature_k`; each block's basis grows (`grow_basis`) until no populated dressed state holds more
/// than 1e-12 of its weight in the top two J of the basis.
pub fn top_pendular(molecule: &Molecule, intensity_wcm2: f64, static_kv_cm: f64, temperature_k: f64) -> Result<TopPendular> {
    let top = molecule.as_top().cloned().ok_or_else(|| Error::input("molecule", format!("{} is not a top", molecule.name)))?;
    let per_cm = cm_to_rad_per_ps(1.0);
    let s_cm = dipole_rate_rad_per_ps(molecule.dipole_debye, static_kv_cm) / per_cm;
    let u2_cm = crate::units::coupling_rad_per_ps_per_a3_wcm2() * top.delta_alpha_a3() * intensity_wcm2 / per_cm;
    let polar = s_cm != 0.0;
    let frame = TopFrame::new(&top, polar);
    let ensemble = TopEnsemble::new(&top, &frame, temperature_k, 1e-8)?;
    let symmetric = top.kind() != crate::molecule::top::TopKind::Asymmetric;
    let blocks: Vec<OrientedBlock> = if polar && !symmetric { oriented_blocks(&frame, &ensemble) } else { class_blocks(&frame, &ensemble, polar) };
    let setting = DressedSetting {
        top: &top,
        frame: &frame,
        u2_cm,
        s_cm,
        align: AngularOperator::cos2_position(frame.position(top.alignment_axis)),
        names: if symmetric { vec![] } else { level_names(&top, ensemble.j_max) },
    };
    // About the width of the pendular states in J; the edge check grows the basis where it is short.
    let reach = (1.5 * ((u2_cm.abs() + s_cm.abs()) / top.c_cm).sqrt()).ceil() as i64 + 4;
    let results: Vec<Vec<TopDressedState>> = blocks
        .par_iter()
        .map(|b| {
            grow_basis(
                (b.starts.iter().map(|st| st.j).max().unwrap_or(0) + reach) as usize,
                MAX_J as usize,
                |j_max| Ok(dressed_block_states(&setting, b, j_max as i64)),
                || Error::Numerical(format!("dressed states of block M = {}, {:?} need J > {MAX_J}; lower the fields", b.m, b.sym)),
            )
        })
        .collect::<Result<Vec<_>>>()?;
    let mut states: Vec<TopDressedState> = results.into_iter().flatten().collect();
    states.sort_by(|a, b| (a.m, a.energy_cm).partial_cmp(&(b.m, b.energy_cm)).expect("finite energies"));
    let thermal_cos2 = states.iter().map(|d| d.population * d.cos2).sum();
    let thermal_cos = states.iter().map(|d| d.population * d.cos).sum();
    Ok(TopPendular { states, thermal_cos2, thermal_cos, thermal_cos_x: None, discarded_population: ensemble.discarded_population })
}

/// The dressed states of the populated levels of one block with a basis up to `j_max`, or None when one of
/// them holds more than 1e-12 of its weight in the top two J of the basis.
fn dressed_block_states(setting: &DressedSetting, b: &OrientedBlock, j_max: i64) -> Option<Vec<TopDressedState>> {
    let DressedSetting { top, frame, u2_cm, s_cm, .. } = *setting;
    let basis = TopBlockBasis::new(frame, TopBlock { m: b.m, sym: b.sym, j_max });
    let n = basis.size();
    let p = block_populations(&basis, &b.starts);
    let a = basis.operator(&laser_operator(top, frame));
    let d = basis.operator(&AngularOperator::cos_z());
    let h = DMatrix::from_fn(n, n, |r, c| if r == c { basis.energies_cm[r] } else { 0.0 } - u2_cm * a[(r, c)] - s_cm * d[(r, c)]);
    let (energies, vectors) = sorted_eigen(h);
    let align = basis.operator(&setting.align);
    // The n-th lowest field-free level of the class becomes its n-th lowest dressed state.
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&x, &y| basis.energies_cm[x].total_cmp(&basis.energies_cm[y]).then(x.cmp(&y)));
    let edge_from = basis.j_ranges.iter().rev().take(2).map(|r| r.1).min().unwrap_or(n);
    let mut out = vec![];
    for (rank, &i) in order.iter().enumerate() {
        if p[i] <= 1e-300 {
            continue;
        }
        let v = vectors.column(rank);
        if v.rows(edge_from, n - edge_from).norm_squared() > 1e-12 {
            return None;
        }
        let j = basis.j_ranges.iter().find(|r| i >= r.1 && i < r.1 + r.2).map(|r| r.0).unwrap_or(0);
        let label = level_label(&setting.names, b.sym, j, basis.energies_cm[i]);
        out.push(TopDressedState {
            m: b.m,
            j,
            label,
            energy_cm: energies[rank],
            cos2: (v.transpose() * &align * v)[(0, 0)],
            cos: if s_cm != 0.0 { (v.transpose() * &d * v)[(0, 0)] } else { 0.0 },
            cos_x: 0.0,
            reflection: None,
            population: b.weight * p[i],
        });
    }
    Some(out)
}

/// Blocks of the ensemble's own classes (Wang classes, or K of a symmetric top); `split_k` separates ±K
/// at M > 0 (a static field moves them apart by −μE K M / J(J+1)).
fn class_blocks(frame: &TopFrame, ensemble: &TopEnsemble, split_k: bool) -> Vec<OrientedBlock> {
    let mut out = vec![];
    for bp in &ensemble.blocks {
        let source = TopBlockBasis::new(frame, TopBlock { m: bp.m, sym: bp.sym, j_max: bp.levels.last().map(|l| l.0).unwrap_or(0) });
        let starts: Vec<Start> = bp.levels.iter().map(|&(j, idx, pop)| Start { j, amplitudes: level_amplitudes(&source, j, idx), population: pop }).collect();
        match bp.sym {
            TopSym::K(k) if split_k && k > 0 && bp.m > 0 => {
                let flipped = starts.iter().map(|st| Start { amplitudes: st.amplitudes.iter().map(|&(kk, c)| (-kk, c)).collect(), ..st.clone() }).collect();
                out.push(OrientedBlock { m: bp.m, sym: TopSym::K(k), weight: 0.5 * bp.weight, starts });
                out.push(OrientedBlock { m: bp.m, sym: TopSym::K(-k), weight: 0.5 * bp.weight, starts: flipped });
            }
            sym => out.push(OrientedBlock { m: bp.m, sym, weight: bp.weight, starts }),
        }
    }
    out
}

/// The name of the field-free level of J and energy `e0` (cm⁻¹) in a block of symmetry `sym`: "J K" of a
/// symmetric top, else its "J Ka Kc" from `names` ([`level_names`]).
fn level_label(names: &[(i64, f64, String)], sym: TopSym, j: i64, e0: f64) -> String {
    match sym {
        TopSym::K(k) => format!("{j} {k}"),
        _ => names.iter().find(|l| l.0 == j && (l.1 - e0).abs() < 1e-6).map(|l| l.2.clone()).unwrap_or_else(|| format!("{j} ?")),
    }
}

/// Names "J Ka Kc" of an asymmetric top's field-free levels up to `j_max`, with their energies (cm⁻¹): the
/// i-th lowest of the 2J + 1 levels of one J has Ka = ⌈i/2⌉ and Kc = J − ⌊i/2⌋ (i from 0), the standard
/// labelling by correlation with the prolate and oblate limits.
fn level_names(top: &Top, j_max: i64) -> Vec<(i64, f64, String)> {
    let frame = TopFrame::new(top, false);
    let bases: Vec<TopBlockBasis> = [0, 1]
        .iter()
        .flat_map(|&kp| [1, -1].map(|sigma| TopSym::Reflection { k_parity: kp, sigma }))
        .map(|sym| TopBlockBasis::new(&frame, TopBlock { m: 0, sym, j_max }))
        .collect();
    let mut out = vec![];
    for j in 0..=j_max {
        let mut e: Vec<f64> =
            bases.iter().flat_map(|b| b.j_ranges.iter().filter(|r| r.0 == j).flat_map(|&(_, start, len)| b.energies_cm[start..start + len].to_vec())).collect();
        e.sort_by(f64::total_cmp);
        out.extend(e.into_iter().enumerate().map(|(i, x)| (j, x, format!("{j} {} {}", i.div_ceil(2), j as usize - i / 2))));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn top(a: f64, b: f64, c: f64) -> Top {
        let mut t = Top::rigid(a, b, c, [9.0, 6.0, 4.5]);
        t.dipole_axis = BodyAxis::A;
        t
    }

    #[test]
    fn the_two_colour_operator_is_the_hyperpolarizability_contracted_with_the_direction_cosines() {
        // Reference: Σ_ijk β_ijk Φ_Zi Φ_Zj Φ_Zk written out for a C2v tensor with Kleinman symmetry
        // (β_dgg = β_gdg = β_ggd, dipole axis d; common practice), with the direction cosines of the frame
        // axes Φ_Zz = cosθ, Φ_Zx = −sinθ cosχ, Φ_Zy = sinθ sinχ (basis::top), evaluated at scattered angles
        // against the operator's D-function expansion (Wigner's explicit d sum, Edmonds eq. 4.1.23). The
        // dipole along b of a top whose frame puts a and c across it; β_daa ≠ β_dcc.
        use crate::basis::wigner::small_d_explicit;
        let mut t = Top::rigid(0.6, 0.2, 0.15, [9.0, 6.0, 4.5]);
        t.dipole_axis = BodyAxis::B;
        let frame = TopFrame::new(&t, true);
        let beta = [50.0, 200.0, -30.0];
        let (op, bound) = hyperpolarizability_operator(&beta, &frame, BodyAxis::B);
        assert!((bound - (3.0 * 50.0 + 200.0 + 3.0 * 30.0)).abs() < 1e-12);
        for (th, chi) in [(0.3f64, 0.2f64), (1.1, 2.5), (2.0, -0.7), (2.9, 4.0)] {
            let value = op.identity + op.terms.iter().map(|&(r, q, c)| c * small_d_explicit(r, 0, q, th) * (q as f64 * chi).cos()).sum::<f64>();
            let phi = [th.cos(), -th.sin() * chi.cos(), th.sin() * chi.sin()];
            let cos_of = |g: BodyAxis| phi[frame.position(g)];
            let d = cos_of(BodyAxis::B);
            let want = beta[1] * d.powi(3) + 3.0 * beta[0] * d * cos_of(BodyAxis::A).powi(2) + 3.0 * beta[2] * d * cos_of(BodyAxis::C).powi(2);
            assert!((value - want).abs() < 1e-12, "{th} {chi}: {value} vs {want}");
        }
    }

    #[test]
    fn first_order_stark_shift_of_a_symmetric_top() {
        // A symmetric top's |J K M⟩ shifts by −μE K M / [J(J+1)] to first order (Townes & Schawlow,
        // "Microwave Spectroscopy" (1955), eq. 10-4). Prolate top A = 2.5, B = C = 0.3 cm⁻¹, M = 1, odd K:
        // the J = 1, K = ±1 pair splits by ∓s/2, J = 2, K = ±1 by ∓s/6 (s = μE/ħ), up to terms in s².
        let t = top(2.5, 0.3, 0.3);
        let frame = TopFrame::new(&t, true);
        let ops = OrientedOps::new(&t, &frame, TopBlock { m: 1, sym: TopSym::KParity(1), j_max: 8 }, false, None);
        let s = 1e-5;
        let dressed = ops.dressed(s);
        let e0 = |j: f64, k: f64| cm_to_rad_per_ps(0.3 * j * (j + 1.0) + (2.5 - 0.3) * k * k);
        for (j, want) in [(1.0, 0.5), (2.0, 1.0 / 6.0)] {
            for sign in [1.0, -1.0] {
                let target = e0(j, 1.0) - sign * want * s;
                let closest = dressed.0.iter().map(|e| (e - target).abs()).fold(f64::INFINITY, f64::min);
                assert!(closest < 1e-3 * s, "J = {j}: no dressed level at {target} (closest off by {closest})");
            }
        }
    }

    #[test]
    fn the_reflection_classes_split_the_m_zero_block_exactly() {
        // σ|J K 0⟩ = (−1)^K |J −K 0⟩ commutes with H0 and the dipole coupling, so the dressed spectrum of
        // the K-parity block at M = 0 is the union of the spectra of its σ = +1 and σ = −1 classes. With
        // the other sign convention the classes would couple and the spectra would differ.
        let t = top(0.6, 0.2, 0.15);
        let frame = TopFrame::new(&t, true);
        for kp in [0, 1] {
            let whole = OrientedOps::new(&t, &frame, TopBlock { m: 0, sym: TopSym::KParity(kp), j_max: 6 }, false, None);
            let mut parts: Vec<f64> = [1, -1]
                .iter()
                .flat_map(|&sigma| {
                    OrientedOps::new(&t, &frame, TopBlock { m: 0, sym: TopSym::Reflection { k_parity: kp, sigma }, j_max: 6 }, false, None)
                        .dressed(0.8)
                        .0
                        .clone()
                })
                .collect();
            parts.sort_by(f64::total_cmp);
            let all = whole.dressed(0.8).0.clone();
            assert_eq!(all.len(), parts.len());
            let worst = all.iter().zip(&parts).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max);
            assert!(worst < 1e-10, "K parity {kp}: spectra differ by {worst}");
        }
    }

    /// Thermal ⟨Φ_Zz⟩ of the dressed states that the field-free levels of each class correlate with, the
    /// n-th lowest level of a class going to its n-th lowest dressed state (equal spin weights).
    fn adiabatic_cos(classes: &[&OrientedOps], s: f64, kt_rad: f64) -> f64 {
        let (mut num, mut den) = (0.0, 0.0);
        for ops in classes {
            let mut free = ops.omega.clone();
            free.sort_by(f64::total_cmp);
            let dressed = ops.dressed(s);
            let d = &ops.dipole_eigen;
            for (r, e) in free.iter().enumerate() {
                let p = (-(e - free[0]) / kt_rad).exp();
                let v = dressed.1.column(r);
                num += p * (v.transpose() * d * v)[(0, 0)];
                den += p;
            }
        }
        num / den
    }

    #[test]
    fn ranking_within_m_alone_gives_another_thermal_average_than_within_the_exact_classes() {
        // At M = 0 the reflection σ is an exact symmetry: its two classes cross freely as the field grows.
        // Ranking the levels of the whole K-parity block by energy (as if M and K parity were the only
        // symmetries) correlates some levels with the wrong dressed states; the thermal averages differ.
        // The solver's blocks are the σ classes, so it ranks within them.
        let t = top(0.6, 0.2, 0.15);
        let frame = TopFrame::new(&t, true);
        let s = cm_to_rad_per_ps(1.5);
        let kt = cm_to_rad_per_ps(0.8);
        let whole = OrientedOps::new(&t, &frame, TopBlock { m: 0, sym: TopSym::KParity(0), j_max: 14 }, false, None);
        let plus = OrientedOps::new(&t, &frame, TopBlock { m: 0, sym: TopSym::Reflection { k_parity: 0, sigma: 1 }, j_max: 14 }, false, None);
        let minus = OrientedOps::new(&t, &frame, TopBlock { m: 0, sym: TopSym::Reflection { k_parity: 0, sigma: -1 }, j_max: 14 }, false, None);
        let within_m = adiabatic_cos(&[&whole], s, kt);
        let within_classes = adiabatic_cos(&[&plus, &minus], s, kt);
        assert!((within_m - within_classes).abs() > 1e-3, "⟨cos⟩ ranked within M {within_m} vs within the classes {within_classes}");
    }

    #[test]
    fn second_order_stark_shifts_match_the_line_strength_formula() {
        // Reference: tests/data/stark_second_order.csv, written by tools/reference/stark_reference.py from a
        // basis of its own (Wigner d functions by quadrature) with the line-strength form of the second-order
        // Stark energy (S. Golden and E. B. Wilson, J. Chem. Phys. 16, 669 (1948)), for tops with the dipole
        // along a, b or c, every level J ≤ 3 and M ≤ 3 that is not degenerate within its M. Here the same
        // coefficient from the oriented path's blocks: Σ_k |⟨n|Φ_Zz|k⟩|² / (E_n − E_k) over the block's
        // field-free levels (a basis up to J = 4 holds every term), and, for levels at least 0.05 cm⁻¹ from
        // their neighbours, the curvature of the dressed levels themselves.
        let text = include_str!("../../tests/data/stark_second_order.csv");
        let per_cm = cm_to_rad_per_ps(1.0);
        // (case, dipole axis, constants, levels (M, J, energy, coefficient)).
        type Case = (String, BodyAxis, [f64; 3], Vec<(i64, i64, f64, f64)>);
        let mut cases: Vec<Case> = vec![];
        for line in text.lines().filter(|l| !l.starts_with('#')).skip(1) {
            let f: Vec<&str> = line.split(',').collect();
            let num = |i: usize| f[i].parse::<f64>().expect("number");
            if cases.last().is_none_or(|c| c.0 != f[0]) {
                let axis = match f[1] {
                    "a" => BodyAxis::A,
                    "b" => BodyAxis::B,
                    _ => BodyAxis::C,
                };
                cases.push((f[0].to_string(), axis, [num(2), num(3), num(4)], vec![]));
            }
            cases.last_mut().expect("case").3.push((num(5) as i64, num(6) as i64, num(7), num(8)));
        }
        assert_eq!(cases.len(), 4);
        let mut checked_curvature = 0;
        for (name, axis, [a, b, c], levels) in &cases {
            let mut t = Top::rigid(*a, *b, *c, [9.0, 6.0, 4.5]);
            t.dipole_axis = *axis;
            let frame = TopFrame::new(&t, true);
            let mut ours: Vec<(i64, i64, f64, f64)> = vec![];
            for m in 0..=3i64 {
                let syms: Vec<TopSym> = if m == 0 {
                    [0, 1].iter().flat_map(|&kp| [1, -1].map(|sigma| TopSym::Reflection { k_parity: kp, sigma })).collect()
                } else {
                    vec![TopSym::KParity(0), TopSym::KParity(1)]
                };
                for sym in syms {
                    let ops = OrientedOps::new(&t, &frame, TopBlock { m, sym, j_max: 4 }, false, None);
                    let n = ops.omega.len();
                    for &(j, first, count) in &ops.basis.j_ranges {
                        if j > 3 {
                            continue;
                        }
                        for i in first..first + count {
                            let e = ops.omega[i];
                            if (first..first + count).any(|k| k != i && (ops.omega[k] - e).abs() < 1e-9 * per_cm) {
                                continue; // degenerate within the block: shifts to first order
                            }
                            let coef: f64 = (0..n)
                                .filter(|&k| (ops.omega[k] - e).abs() > 1e-9 * per_cm)
                                .map(|k| ops.dipole_eigen[(i, k)].powi(2) / (e - ops.omega[k]))
                                .sum();
                            ours.push((m, j, e / per_cm, coef * per_cm));
                            // The dressed levels: (E(s) + E(−s) − 2E(0)) / 2s², Richardson-extrapolated in s.
                            let gap = (0..n).filter(|&k| k != i).map(|k| (ops.omega[k] - e).abs()).fold(f64::INFINITY, f64::min);
                            if gap > 0.05 * per_cm {
                                let rank = |v: &[f64]| v.iter().filter(|&&x| x < e - 0.5 * gap).count();
                                let mut free = ops.omega.clone();
                                free.sort_by(f64::total_cmp);
                                let r = rank(&free);
                                let curvature = |s: f64| (ops.dressed(s).0[r] + ops.dressed(-s).0[r] - 2.0 * free[r]) / (2.0 * s * s);
                                let s = 0.02 * gap;
                                let c0 = (4.0 * curvature(s) - curvature(2.0 * s)) / 3.0;
                                assert!((c0 - coef).abs() < 1e-4 * coef.abs() + 1e-9, "{name} M = {m} J = {j}: dressed curvature {c0} vs {coef}");
                                checked_curvature += 1;
                            }
                        }
                    }
                }
            }
            // The reference works in whole M blocks: levels degenerate across the solver's symmetry classes
            // (±K of a symmetric top at M = 0, which σ separates) are left out there and here.
            let all = ours.clone();
            ours.retain(|o| all.iter().filter(|p| p.0 == o.0 && (p.2 - o.2).abs() < 1e-9).count() == 1);
            for &(m, j, e, want) in levels {
                let found: Vec<&(i64, i64, f64, f64)> = ours.iter().filter(|o| o.0 == m && o.1 == j && (o.2 - e).abs() < 1e-8).collect();
                assert_eq!(found.len(), 1, "{name}: level M = {m}, J = {j}, E = {e} cm⁻¹ found {} times", found.len());
                let got = found[0].3;
                assert!((got - want).abs() < 1e-8 * want.abs().max(1e-3), "{name} M = {m} J = {j} E = {e}: {got} vs {want} (cm⁻¹ per (μE)²)");
            }
            assert_eq!(ours.len(), levels.len(), "{name}: the solver has non-degenerate levels the reference lacks");
        }
        assert!(checked_curvature > 40, "{checked_curvature} dressed curvatures checked");
    }
}
