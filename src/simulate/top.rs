//! The solver path for symmetric and asymmetric tops in linearly polarized laser pulses (M conserved).
//!
//! Each (M, symmetry) block works in its field-free eigenbasis: field-free evolution is exact phases,
//! and the laser coupling −¼E²Σ α_ii Φ_Zi² is one real symmetric matrix A whose eigendecomposition
//! makes a kick exp(iθA) exact. Finite pulses use the same fourth-order splitting as linear molecules.
//! After the last pulse the blocks' coherences are merged by pairs of field-free levels.

use super::driver::{Kernel, Run, TOP_STEP, grow_basis, walk};
use super::{BlockReport, Event, RunResult};
use crate::basis::top::{AngularOperator, TopBlock, TopBlockBasis, TopFrame, TopSym};
use crate::ensemble::top::{TopBlockPopulation, TopEnsemble};
use crate::error::{Error, Result};
use crate::field::FieldModel;
use crate::molecule::top::{BodyAxis, Top};
use crate::numeric::Banded;
use crate::numeric::{Strided, gemm_strided};
use crate::observe::pairs::PairSums;
use crate::observe::{FreeSums, PairParts, ThreeAxisParts, Trace};
use crate::propagate::BlockState;
use crate::propagate::polar::PolarOps;
use crate::propagate::sparse::{Csr, chebyshev_kick_transposed, with_scratch};
use crate::scenario::{Method, SolverSettings};
use crate::units::cm_to_rad_per_ps;
use nalgebra::DMatrix;
use rayon::prelude::*;
use std::collections::HashMap;
use std::sync::{Arc, Mutex};

/// Largest J a top's basis may reach; beyond it the run is refused, not truncated.
pub const MAX_TOP_BASIS_J: i64 = 160;

/// Number of body-axis alignment observables (⟨cos²θ⟩ of the a, b and c axes).
pub(super) const AXES: usize = 3;

/// Operators of one top block. States are kept in the field-free eigenbasis (free evolution is exact
/// phases); the coupling is applied in the function basis, where it is sparse.
#[derive(Debug)]
pub struct TopOps {
    /// Basis, eigenstates and level labels.
    pub basis: TopBlockBasis,
    /// Field-free angular frequencies of the eigenstates, rad/ps.
    pub omega: Vec<f64>,
    /// Coupling A = Σ_i (α_i − α_min) Φ_Zi² / Δα in the function basis (spectrum in [0, 1]).
    coupling: Csr,
    /// Observables between eigenstates: Φ_Za², Φ_Zb², Φ_Zc², then |Φ_Z,align| when built for 2D.
    pub observables: Vec<Banded>,
    /// Largest angular frequency of a transition the coupling drives, rad/ps.
    pub fastest: f64,
}

impl TopOps {
    /// Build the operators of `block` for `top` in `frame`; `with_2d` adds the detector-plane observable.
    pub fn new(top: &Top, frame: &TopFrame, block: TopBlock, with_2d: bool) -> TopOps {
        let basis = TopBlockBasis::new(frame, block);
        let omega: Vec<f64> = basis.energies_cm.iter().map(|e| cm_to_rad_per_ps(*e)).collect();
        let ops: Vec<AngularOperator> = (0..AXES).map(|i| AngularOperator::cos2_position(frame.position(BodyAxis::from_index(i)))).collect();
        let mut observables: Vec<Banded> = ops.iter().map(|o| basis.operator_banded(o)).collect();
        let da = top.delta_alpha_a3();
        let a_min = top.polarizability_a3.iter().cloned().fold(f64::MAX, f64::min);
        let weights: Vec<f64> = (0..AXES).map(|i| (top.polarizability_a3[i] - a_min) / da).collect();
        let mut a_op = AngularOperator { identity: 0.0, terms: vec![] };
        for (o, w) in ops.iter().zip(&weights) {
            a_op.identity += w * o.identity;
            a_op.terms.extend(o.terms.iter().map(|&(r, q, c)| (r, q, w * c)));
        }
        let coupling = Csr::from_triplets(basis.size(), basis.function_triplets(&a_op));
        let mut fastest: f64 = 0.0;
        for (r0, c0, blk) in &basis.operator_banded(&a_op).blocks {
            for c in 0..blk.ncols() {
                for r in 0..blk.nrows() {
                    if blk[(r, c)].abs() > 1e-3 {
                        fastest = fastest.max((omega[r0 + r] - omega[c0 + c]).abs());
                    }
                }
            }
        }
        if with_2d {
            observables.push(Banded::dense(basis.abs_direction_cosine(frame.position(top.alignment_axis))));
        }
        TopOps { basis, omega, coupling, observables, fastest }
    }

    /// Exact kick exp(iθA) on all states (eigenbasis in and out), through the function basis.
    pub fn kick(&self, state: &mut BlockState, theta: f64) {
        kick_through_functions(&self.basis, &self.coupling, state, theta);
    }

    /// Approximate memory held by the operators, bytes.
    pub fn bytes(&self) -> usize {
        let vectors: usize = self.basis.vectors.iter().map(|v| v.len()).sum();
        let observables: usize = self.observables.iter().flat_map(|o| o.blocks.iter().map(|b| b.2.len())).sum();
        8 * (vectors + observables + self.omega.len()) + 16 * self.coupling.nnz()
    }

    /// Number of eigenstates in the top two J values of the basis (the edge watched for truncation).
    pub fn edge_states(&self) -> usize {
        let r = &self.basis.j_ranges;
        r.iter().rev().take(2).map(|x| x.2).sum()
    }
}

/// Exact kick exp(iθC) of a coupling C (function basis, spectrum in [0, 1]) on all states of a block
/// (eigenbasis in and out).
pub(super) fn kick_through_functions(basis: &TopBlockBasis, coupling: &Csr, state: &mut BlockState, theta: f64) {
    let groups: Vec<(usize, usize, &DMatrix<f64>)> = basis.j_ranges.iter().zip(&basis.vectors).map(|(&(_, s, len), v)| (s, len, v)).collect();
    kick_through_groups(&groups, coupling, state, theta);
}

/// As [`kick_through_functions`] for a basis cut into groups (first index, length, eigenvectors as
/// columns in the group's functions) of any kind.
pub(super) fn kick_through_groups(groups: &[(usize, usize, &DMatrix<f64>)], coupling: &Csr, state: &mut BlockState, theta: f64) {
    if theta == 0.0 {
        return;
    }
    let (n, cols) = state.psi.shape();
    with_scratch(n * cols, |f| {
        to_functions_t(groups, &state.psi, f);
        chebyshev_kick_transposed(coupling, theta, f, cols);
        // Undo: ψ = Vᵀ f per group.
        for &(s, len, v) in groups {
            let vt = Strided { data: v.as_slice(), offset: 0, shape: (len, len), strides: (len, 1) };
            let f_rows = Strided { data: f, offset: s * cols, shape: (len, cols), strides: (cols, 1) };
            gemm_strided(vt, f_rows, state.psi.as_mut_slice(), s, (1, n));
        }
    });
}

/// f = (V ψ)ᵀ per group: the function-basis states, transposed (columns × n) for sparse products,
/// computed by strided products without copies.
pub(super) fn to_functions_t(groups: &[(usize, usize, &DMatrix<f64>)], psi: &DMatrix<f64>, f: &mut [f64]) {
    let (n, cols) = psi.shape();
    for &(s, len, v) in groups {
        let v = Strided { data: v.as_slice(), offset: 0, shape: (len, len), strides: (1, len) };
        let vt = Strided { strides: (len, 1), ..v };
        let psi_rows_t = Strided { data: psi.as_slice(), offset: s, shape: (cols, len), strides: (n, 1) };
        gemm_strided(psi_rows_t, vt, f, s * cols, (1, cols));
    }
}

/// Σ_c p_c ⟨ψ_c|O|ψ_c⟩ for a banded O (eigenbasis), one matrix product per stored block.
fn expect_banded(state: &BlockState, pops: &[f64], o: &Banded) -> f64 {
    let k = state.k;
    // States are ordered by J: rows above the last one holding any amplitude (|ψ|² > 1e-26, so that the
    // neglected terms stay below 1e-13) need not enter the products.
    let n = state.psi.nrows();
    let live = (0..n).rev().find(|&r| (0..2 * k).any(|c| state.psi[(r, c)].powi(2) > 1e-26)).map(|r| r + 1).unwrap_or(0);
    let mut total = 0.0;
    for (r0, c0, b) in &o.blocks {
        if *r0 >= live || *c0 >= live {
            continue;
        }
        let (nr, nc) = ((live - r0).min(b.nrows()), (live - c0).min(b.ncols()));
        let b = b.view((0, 0), (nr, nc));
        let y = b * state.psi.rows(*c0, nc);
        let x = state.psi.rows(*r0, nr);
        for (c, p) in pops.iter().enumerate() {
            total += p * (x.column(c).dot(&y.column(c)) + x.column(c + k).dot(&y.column(c + k)));
        }
    }
    total
}

/// A block's coherence coefficients ρ_ab O_ba (a < b) per observable, and the diagonal sums.
#[derive(Clone)]
pub(super) struct BlockPairs {
    diag: Vec<f64>,
    pairs: Vec<Vec<crate::observe::pairs::StatePair>>,
}

/// Coefficients below this are dropped (their total stays far below the accuracy of any trace).
const PAIR_TRIM: f64 = 1e-16;

/// Coefficients of `state` for the banded observables (eigenbasis).
fn block_pairs(state: &BlockState, pops: &[f64], observables: &[Banded]) -> BlockPairs {
    let n = state.psi.nrows();
    let k = state.k;
    let mut w = state.psi.clone();
    for (c, p) in pops.iter().enumerate() {
        let s = p.sqrt();
        w.column_mut(c).scale_mut(s);
        w.column_mut(c + k).scale_mut(s);
    }
    let (wr, wi) = (w.columns(0, k).into_owned(), w.columns(k, k).into_owned());
    let nobs = observables.len();
    let mut diag = vec![0.0; nobs];
    let mut pairs = vec![vec![]; nobs];
    let pop: Vec<f64> = (0..n).map(|r| wr.row(r).norm_squared() + wi.row(r).norm_squared()).collect();
    for (o, op) in observables.iter().enumerate() {
        for (r0, c0, b) in &op.blocks {
            let (nr, nc) = b.shape();
            if c0 + nc <= *r0 {
                continue; // blocks below the diagonal mirror those above
            }
            let (ar, ai) = (wr.rows(*r0, nr), wi.rows(*r0, nr));
            let (br, bi) = (wr.rows(*c0, nc), wi.rows(*c0, nc));
            // ρ_ab = Σ_c w_ac conj(w_bc)
            let re = ar * br.transpose() + ai * bi.transpose();
            let im = ai * br.transpose() - ar * bi.transpose();
            for y in 0..nc {
                let bb = c0 + y;
                if pop[bb] <= 1e-22 {
                    continue;
                }
                for x in 0..nr {
                    let a = r0 + x;
                    if bb < a || pop[a] <= 1e-22 {
                        continue;
                    }
                    let v = b[(x, y)];
                    if bb == a {
                        diag[o] += re[(x, y)] * v;
                    } else {
                        let c = (re[(x, y)] * v, im[(x, y)] * v);
                        if c.0.abs() + c.1.abs() > PAIR_TRIM {
                            pairs[o].push((a, bb, c));
                        }
                    }
                }
            }
        }
    }
    BlockPairs { diag, pairs }
}

/// The scenario key of the orienting field in `field` that a top refuses: the static field, else the
/// two-colour pulses, else the terahertz pulses.
fn polar_field_key(field: &FieldModel) -> &'static str {
    if field.static_field.is_some() {
        "static_field"
    } else if !field.two_colour.is_empty() {
        "two_colour"
    } else {
        "terahertz"
    }
}

/// Total kick strength P (rad) of the laser pulses for the top's anisotropy Δα = α_max − α_min (each
/// capped at the reach of an adiabatic pulse).
pub(super) fn laser_strengths(top: &Top, field: &FieldModel) -> f64 {
    let da = top.delta_alpha_a3();
    let b = cm_to_rad_per_ps(top.c_cm);
    field
        .pulses
        .iter()
        .map(|p| {
            let adiabatic = 1.5 * (p.peak_rate_rad_per_ps(da).abs() / b).sqrt() + 3.0;
            p.kick_strength(da).abs().min(adiabatic)
        })
        .sum()
}

/// Room (in J) above the thermal levels (up to `j_thermal`) that the laser pulses of `field` need;
/// refuses fields that would need a basis beyond `MAX_TOP_BASIS_J`.
pub(super) fn laser_reach(top: &Top, j_thermal: i64, field: &FieldModel) -> Result<i64> {
    let total = laser_strengths(top, field);
    let reach = (1.35 * total).ceil() as i64 + 10;
    if !total.is_finite() || j_thermal + reach > MAX_TOP_BASIS_J {
        return Err(Error::input(
            "pulses",
            format!(
                "total kick strength P = {total:.3e} would drive the top beyond J = {MAX_TOP_BASIS_J}, the largest basis kicktrain uses for tops; expected weaker pulses or a lower temperature"
            ),
        ));
    }
    Ok(reach)
}

/// Operators cached across runs stay below this many bytes (the rest are rebuilt when needed).
const OPS_CACHE_BYTES: usize = 2 << 30;

/// Solver for one top at one temperature; operators are cached across runs (up to `OPS_CACHE_BYTES`).
pub struct TopSolver {
    /// The top's constants.
    pub top: Top,
    /// Its quantization frame.
    pub frame: TopFrame,
    /// The initial thermal ensemble.
    pub ensemble: TopEnsemble,
    settings: SolverSettings,
    cache: Mutex<HashMap<(TopBlock, bool), Arc<TopOps>>>,
    /// Where finished blocks are counted (shared with the owning `Solver`).
    pub(super) progress: Arc<super::RunProgress>,
}

/// What one block returns before the blocks are merged.
pub(super) struct TopOutcome {
    pub values: Vec<Vec<f64>>,
    /// (first sample, end sample, time, coherences) of each field-free stretch with samples.
    pub gaps: Vec<(usize, usize, f64, BlockPairs)>,
    /// Time and coherences after the last event (None when the field is still on then).
    pub final_pairs: Option<(f64, BlockPairs)>,
    /// The block's symmetry and its (J, first index, count) ranges: with J and the index within J they
    /// name each field-free level.
    pub sym: TopSym,
    pub j_ranges: Vec<(i64, usize, usize)>,
    /// Field-free angular frequencies of the levels, rad/ps.
    pub omega: Vec<f64>,
    pub report: BlockReport,
    /// How many identical blocks this one stands for.
    pub weight: f64,
    /// Time averages of the observables while a static field stays on after the last sample (the
    /// dressed-state diagonal); None when the field is off at the end.
    pub dressed_statics: Option<Vec<f64>>,
}

/// The merge of top blocks' outcomes, in block order: sampled values summed, coherences merged by pairs
/// of field-free levels (so memory holds the merged sums, not every block's coefficients).
pub(super) struct TopAssembly {
    values: Vec<Vec<f64>>,
    ids: HashMap<(TopSym, i64, usize), u32>,
    gap_sums: Vec<(usize, usize, PairSums)>,
    final_sums: Option<PairSums>,
    /// Σ weight × dressed time averages of blocks that end in a static field.
    dressed: Option<Vec<f64>>,
    reports: Vec<BlockReport>,
    nobs: usize,
}

impl TopAssembly {
    pub fn new(nobs: usize, samples: usize) -> TopAssembly {
        TopAssembly { values: vec![vec![0.0; samples]; nobs], ids: HashMap::new(), gap_sums: vec![], final_sums: None, dressed: None, reports: vec![], nobs }
    }

    pub fn add(&mut self, o: TopOutcome) {
        for (acc, v) in self.values.iter_mut().zip(&o.values) {
            for (a, b) in acc.iter_mut().zip(v) {
                *a += b;
            }
        }
        // Level labels shared by all blocks: (symmetry, J, index within J) → id, in block order.
        let mut lid = vec![0u32; o.omega.len()];
        for &(j, start, n) in &o.j_ranges {
            for i in 0..n {
                let next = self.ids.len() as u32;
                lid[start + i] = *self.ids.entry((o.sym, j, i)).or_insert(next);
            }
        }
        let nobs = self.nobs;
        if self.gap_sums.is_empty() {
            self.gap_sums = o.gaps.iter().map(|&(from, to, t0, _)| (from, to, PairSums::new(nobs, t0))).collect();
        }
        for ((_, _, sums), (_, _, _, p)) in self.gap_sums.iter_mut().zip(&o.gaps) {
            sums.add_pairs(o.weight, &p.diag, &p.pairs, &lid, &o.omega);
        }
        if let Some((t, p)) = &o.final_pairs {
            let fin = self.final_sums.get_or_insert_with(|| PairSums::new(nobs, *t));
            fin.add_pairs(o.weight, &p.diag, &p.pairs, &lid, &o.omega);
        }
        if let Some(d) = &o.dressed_statics {
            let acc = self.dressed.get_or_insert_with(|| vec![0.0; d.len()]);
            acc.iter_mut().zip(d).for_each(|(a, x)| *a += o.weight * x);
        }
        self.reports.push(o.report);
    }

    /// The sampled values (field-free stretches evaluated from the merged sums), the sums after the last
    /// event (empty with t0 = ∞ when the field is still on then: goals use the samples), the time
    /// averages after the last event, and the block reports.
    pub fn finish(self, times_ps: &[f64], t_first: f64) -> (Vec<Vec<f64>>, PairSums, Vec<f64>, Vec<BlockReport>) {
        let mut values = self.values;
        for (from, to, sums) in &self.gap_sums {
            sums.eval_series(&times_ps[*from..*to], |i, v| {
                for (acc, x) in values.iter_mut().zip(v) {
                    acc[from + i] += x;
                }
            });
        }
        let (final_sums, statics) = match (self.final_sums, self.dressed) {
            (Some(s), None) => {
                let st = s.statics();
                (s, st)
            }
            (None, Some(d)) => (PairSums::new(self.nobs, f64::INFINITY), d),
            (None, None) => {
                let s = PairSums::new(self.nobs, t_first);
                let st = s.statics();
                (s, st)
            }
            (Some(_), Some(_)) => unreachable!("every block of a run ends in the same field"),
        };
        (values, final_sums, statics, self.reports)
    }
}

impl TopSolver {
    /// A solver for `top` at `temperature_k`.
    pub fn new(top: &Top, temperature_k: f64, settings: SolverSettings) -> Result<TopSolver> {
        let frame = TopFrame::new(top, false);
        let ensemble = TopEnsemble::new(top, &frame, temperature_k, settings.thermal_tolerance)?;
        Ok(TopSolver { top: top.clone(), frame, ensemble, settings, cache: Mutex::new(HashMap::new()), progress: Default::default() })
    }

    fn ops(&self, block: TopBlock, with_2d: bool) -> Arc<TopOps> {
        let key = (block, with_2d);
        if let Some(o) = self.cache.lock().expect("cache lock").get(&key) {
            return o.clone();
        }
        let o = Arc::new(TopOps::new(&self.top, &self.frame, block, with_2d));
        // Keep operators for later runs (the designer) only while they fit the budget: a warm top's
        // blocks with the dense detector-plane operator would otherwise fill the memory.
        let bytes = o.bytes();
        let mut cache = self.cache.lock().expect("cache lock");
        let held: usize = cache.values().map(|c| c.bytes()).sum();
        if held + bytes <= OPS_CACHE_BYTES {
            cache.insert(key, o.clone());
        }
        o
    }

    /// Kick strength P (rad) of the pulses for the top's anisotropy Δα = α_max − α_min.
    pub(super) fn strengths(&self, field: &FieldModel) -> f64 {
        laser_strengths(&self.top, field)
    }

    /// Room (in J) above the thermal levels that the pulses of `field` need; refuses fields that would
    /// need a basis beyond `MAX_TOP_BASIS_J`.
    pub(super) fn reach(&self, field: &FieldModel) -> Result<i64> {
        laser_reach(&self.top, self.ensemble.j_max, field)
    }

    /// Kicks (kick model) or finite intervals with their default steps, in time order.
    pub(super) fn schedule(&self, field: &FieldModel) -> Vec<Event> {
        let da = self.top.delta_alpha_a3();
        let mut events: Vec<Event> = vec![];
        if self.settings.method == Method::Kick {
            for (i, p) in field.pulses.iter().enumerate().filter(|(_, p)| p.peak_intensity_wcm2 > 0.0) {
                events.extend(super::pulse_kicks(p, i, da, self.settings.kick_nodes));
            }
        } else {
            for iv in field.active_intervals() {
                let shortest = iv.pulses.iter().map(|&i| field.pulses[i].time_scale_ps()).fold(f64::INFINITY, f64::min);
                let peak: f64 = iv.pulses.iter().map(|&i| field.pulses[i].peak_rate_rad_per_ps(da).abs()).sum();
                // The fastest transition is known block by block (see try_block).
                let step_ps = TOP_STEP.step_ps(&self.settings, shortest, 0.0, peak);
                events.push(Event::Finite { start_ps: iv.start_ps, end_ps: iv.end_ps, pulses: iv.pulses.clone(), step_ps });
            }
        }
        events.sort_by(|a, b| a.span().0.total_cmp(&b.span().0));
        events
    }

    /// Run `field` and sample the observables at `times_ps` (ascending).
    pub fn run(&self, field: &FieldModel, times_ps: &[f64], with_2d: bool) -> Result<RunResult> {
        if field.is_polar() {
            return Err(Error::input(
                polar_field_key(field),
                "this path takes laser pulses only; orienting fields on tops go through the oriented-top path (simulate::oriented_top)",
            ));
        }
        let reach = self.reach(field)?;
        let events = self.schedule(field);
        let t_first = events.first().map(|e| e.span().0).or(times_ps.first().copied()).unwrap_or(0.0);
        let nobs = AXES + usize::from(with_2d);
        // Blocks run in parallel in groups (eight per thread, enough to balance the threads); each group's
        // coherences merge into the running sums in block order and are then dropped, so memory holds one
        // group's coefficients, not every block's, and the sums do not depend on thread timing.
        let mut assembly = TopAssembly::new(nobs, times_ps.len());
        let group = 8 * rayon::current_num_threads().max(1);
        self.progress.plan(self.ensemble.blocks.len());
        for blocks in self.ensemble.blocks.chunks(group) {
            let outcomes: Vec<TopOutcome> = blocks
                .par_iter()
                .map(|bp| {
                    let r = self.run_block(bp, &Run { field, items: &events, times: times_ps, t_first }, with_2d, reach);
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
        // Parts of the sums: ⟨cos²⟩ of the body axes a, b, c with Z, then ⟨cos²θ_2D⟩ when built.
        let parts =
            PairParts { cos2: align, cos2_2d: with_2d.then_some(AXES), three_axis: Some(ThreeAxisParts { along_z: align, second, second_from_z: true }) };
        // Symmetric about Z: ⟨Φ_Xg²⟩ = (1 − ⟨Φ_Zg²⟩)/2.
        let three_axis = values[align].iter().zip(&values[second]).map(|(a, b)| a.min(0.5 * (1.0 - b))).collect();
        let trace = Trace {
            times_ps: times_ps.to_vec(),
            cos2: values[align].clone(),
            cos2_2d: with_2d.then(|| values[AXES].clone()),
            body_axes: Some(crate::observe::BodyAxes { a: values[0].clone(), b: values[1].clone(), c: values[2].clone(), three_axis, ..Default::default() }),
            ..Default::default()
        };
        Ok(RunResult {
            trace,
            permanent_cos2: statics[parts.cos2],
            permanent_cos2_2d: parts.cos2_2d.map(|i| statics[i]).unwrap_or(0.0),
            blocks: reports,
            events,
            final_sums: FreeSums::Pairs { sums: final_sums, parts },
            permanent_cos: None,
        })
    }

    fn run_block(&self, bp: &TopBlockPopulation, run: &Run<Event>, with_2d: bool, reach: i64) -> Result<TopOutcome> {
        let j_thermal = bp.levels.last().map(|l| l.0).unwrap_or(0);
        grow_basis(
            (j_thermal + reach) as usize,
            MAX_TOP_BASIS_J as usize,
            |j_max| self.try_block(self.ops(TopBlock { m: bp.m, sym: bp.sym, j_max: j_max as i64 }, with_2d), bp, run),
            || {
                Error::Numerical(format!(
                    "block M = {}, {:?}: the basis would need J > {MAX_TOP_BASIS_J}; lower the intensities or the temperature",
                    bp.m, bp.sym
                ))
            },
        )
    }

    fn try_block(&self, ops: Arc<TopOps>, bp: &TopBlockPopulation, run: &Run<Event>) -> Result<Option<TopOutcome>> {
        let Run { field, items: events, times, t_first } = *run;
        let b = &ops.basis;
        let start: Vec<usize> = bp
            .levels
            .iter()
            .map(|&(j, idx, _)| {
                let r = b.j_ranges.iter().find(|r| r.0 == j).expect("thermal level inside the basis");
                r.1 + idx
            })
            .collect();
        let g = bp.weight;
        let kernel = TopKernel {
            ops: &ops,
            view: TopBlockView::new(&ops.omega, &ops.observables, bp.levels.iter().map(|l| l.2).collect(), g, ops.edge_states()),
            field,
            da: self.top.delta_alpha_a3(),
            settings: &self.settings,
        };
        let Some(w) = walk(&kernel, BlockState::new(b.size(), &start, t_first), events, times, self.settings.edge_tolerance) else {
            return Ok(None);
        };
        let mut gaps: Vec<_> = w.stretches.into_iter().map(|(r, t, pairs)| (r.start, r.end, t, pairs)).collect();
        let final_pairs = (w.state.t_ps, kernel.stretch(&w.state));
        if !w.rest.is_empty() {
            gaps.push((w.rest.start, w.rest.end, final_pairs.0, final_pairs.1.clone()));
        }
        let (values, edge) = (w.values, w.edge);
        let label = crate::basis::BlockSymmetry::of_top_class(bp.sym, &self.frame);
        let report = BlockReport { m: bp.m as u32, parity: label, j_max: ops.basis.block.j_max as u32, size: ops.basis.size(), edge_population: edge };
        Ok(Some(TopOutcome {
            values,
            gaps,
            final_pairs: Some(final_pairs),
            sym: ops.basis.block.sym,
            j_ranges: ops.basis.j_ranges.clone(),
            omega: ops.omega.clone(),
            report,
            weight: g,
            dressed_statics: None,
        }))
    }
}

/// What every top block's kernel does the same way, in the field-free eigenbasis: free phases, the edge
/// population, samples of banded observables and the coherences of a field-free stretch.
pub(super) struct TopBlockView<'a> {
    omega: &'a [f64],
    observables: &'a [Banded],
    /// Populations of the block's initial states.
    pops: Vec<f64>,
    /// Weight of the block (degeneracy and spin statistics).
    g: f64,
    /// Eigenstates in the top two J values of the basis.
    edge_states: usize,
}

impl<'a> TopBlockView<'a> {
    pub fn new(omega: &'a [f64], observables: &'a [Banded], pops: Vec<f64>, g: f64, edge_states: usize) -> TopBlockView<'a> {
        TopBlockView { omega, observables, pops, g, edge_states }
    }

    pub fn observables(&self) -> usize {
        self.observables.len()
    }

    pub fn omega(&self) -> &[f64] {
        self.omega
    }

    pub fn edge(&self, state: &BlockState) -> f64 {
        state.edge_population(self.edge_states)
    }

    pub fn sample(&self, st: &BlockState, out: &mut [f64]) {
        for (x, o) in out.iter_mut().zip(self.observables) {
            *x = self.g * expect_banded(st, &self.pops, o);
        }
    }

    pub fn stretch(&self, st: &BlockState) -> BlockPairs {
        block_pairs(st, &self.pops, self.observables)
    }

    pub fn free(&self, st: &mut BlockState, dt: f64) {
        st.free_with(&crate::propagate::FreePhases::from_omega(self.omega, dt));
    }
}

/// A top's block of one M and one symmetry class in laser pulses (banded direction-cosine operators).
struct TopKernel<'a> {
    ops: &'a TopOps,
    view: TopBlockView<'a>,
    field: &'a FieldModel,
    /// Polarizability anisotropy α_max − α_min, Å³.
    da: f64,
    settings: &'a SolverSettings,
}

impl Kernel for TopKernel<'_> {
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
        if let Event::Kick { strength, .. } = item {
            self.ops.kick(st, *strength);
        }
    }

    fn finite_kick(&self, _index: usize, item: &Event, st: &mut BlockState, t: f64, h: f64) {
        if let Event::Finite { pulses, .. } = item {
            self.ops.kick(st, h * self.field.alignment_rate_of(pulses, t, self.da));
        }
    }

    fn breaks(&self, item: &Event) -> Vec<f64> {
        item.breaks(self.field)
    }

    fn step(&self, step_ps: f64) -> f64 {
        TOP_STEP.in_block(self.settings, step_ps, self.ops.fastest)
    }
}

/// Operators of one (K, M) block of a symmetric top for fields that break head–tail symmetry: the
/// J ladder J = max(|K|, |M|) … `j_max` with cos²θ, |Φ_Z,align|, cosθ and cos³θ of the figure axis
/// (cos³θ as the cube of cosθ built three J values further, exact inside the block).
fn symmetric_top_polar_ops(top: &Top, frame: &TopFrame, k: i64, m: i64, j_max: i64, degeneracy: f64) -> PolarOps {
    let basis = TopBlockBasis::new(frame, TopBlock { m, sym: TopSym::K(k), j_max });
    let n = basis.size();
    let wider = TopBlockBasis::new(frame, TopBlock { m, sym: TopSym::K(k), j_max: j_max + 3 });
    let cos_wide = wider.function_matrix(&AngularOperator::cos_z());
    let cube = &cos_wide * &cos_wide * &cos_wide;
    let cos3 = cube.view((0, 0), (n, n)).into_owned();
    let observables = [
        basis.function_matrix(&AngularOperator::cos2_z()),
        basis.abs_direction_cosine(frame.position(top.alignment_axis)),
        basis.function_matrix(&AngularOperator::cos_z()),
        cos3,
    ];
    let omega = basis.energies_cm.iter().map(|e| cm_to_rad_per_ps(*e)).collect();
    let j_first = basis.j(0) as u32;
    let block = crate::basis::Block { m: m.unsigned_abs() as u32, parity: crate::basis::BOTH_PARITIES, size: n };
    PolarOps::from_parts(block, j_first, degeneracy, crate::basis::BlockSymmetry::KM(k, m), omega, observables)
}

impl super::Solver {
    /// Symmetric tops in static, terahertz (and laser) fields: one block per (K, M) holding every J, run
    /// through the polar schedule, whose couplings are those of the figure axis (`Solver::axis`: α∥ and
    /// α⊥ along and across it, the dipole along it).
    pub(super) fn run_polar_top(&self, solver: &TopSolver, field: &FieldModel, times: &[f64], wanted: [bool; super::POLAR_OBSERVABLES]) -> Result<RunResult> {
        let top = &solver.top;
        if top.kind() == crate::molecule::top::TopKind::Asymmetric {
            return Err(Error::input(
                polar_field_key(field),
                "the figure-axis path is for symmetric tops; asymmetric tops in orienting fields go through the oriented-top path (simulate::oriented_top)",
            ));
        }
        let frame = TopFrame::new(top, true);
        let (items, events) = self.polar_schedule(field);
        let t_first = items.first().map(|e| e.span().0).into_iter().chain(times.first().copied()).fold(f64::INFINITY, f64::min);
        let t_first = if t_first.is_finite() { t_first } else { 0.0 };
        let extra = self.polar_extra(field, &items);
        let run = super::PolarRun { run: super::driver::Run { field, items: &items, times, t_first }, wanted };
        // (K, M) blocks: ±M differ once K ≠ 0 (the Stark shift −μE K M / J(J+1)); (K, M) and (−K, −M) agree.
        // (K, M, weight, thermal levels (J, population)) of each block.
        type PolarBlock = (i64, i64, f64, Vec<(u32, f64)>);
        let mut blocks: Vec<PolarBlock> = vec![];
        for bp in &solver.ensemble.blocks {
            let TopSym::K(k) = bp.sym else { continue };
            let levels: Vec<(u32, f64)> = bp.levels.iter().map(|l| (l.0 as u32, l.2)).collect();
            if k == 0 || bp.m == 0 {
                blocks.push((k, bp.m, bp.weight, levels));
            } else {
                blocks.push((k, bp.m, bp.weight / 2.0, levels.clone()));
                blocks.push((k, -bp.m, bp.weight / 2.0, levels));
            }
        }
        let outcomes: Vec<super::PolarOutcome> = blocks
            .par_iter()
            .map(|(k, m, w, levels)| {
                let j_thermal = levels.last().map(|l| l.0 as usize).unwrap_or(0);
                grow_basis(
                    j_thermal + extra,
                    MAX_TOP_BASIS_J as usize,
                    |j_max| self.try_polar_block(&symmetric_top_polar_ops(top, &frame, *k, *m, j_max as i64, *w), levels, &run),
                    || {
                        Error::Numerical(format!(
                            "block K = {k}, M = {m}: the basis would need J > {MAX_TOP_BASIS_J}; lower the field strengths or the temperature"
                        ))
                    },
                )
            })
            .collect::<Result<Vec<_>>>()?;
        let (values, permanent, reports) = super::sum_polar(outcomes, times.len());
        let (fig2, abs_align, orientation) = super::polar_series(values, wanted);
        // Fixed-K states have ⟨Φ_Zx²⟩ = ⟨Φ_Zy²⟩ = (1 − ⟨cos²θ⟩)/2 (sin²θ cos2χ changes K by 2).
        let across: Vec<f64> = fig2.iter().map(|c| 0.5 * (1.0 - c)).collect();
        let fig = frame.axes[0].index();
        let axis = |i: usize| if i == fig { fig2.clone() } else { across.clone() };
        let align = top.alignment_axis.index();
        let perm_align = if align == fig { permanent[0] } else { 0.5 * (1.0 - permanent[0]) };
        // Symmetric about Z: ⟨Φ_Xg²⟩ = (1 − ⟨Φ_Zg²⟩)/2 for the second axis too.
        let three_axis = axis(align).iter().zip(axis(top.second_axis().index())).map(|(a, b)| a.min(0.5 * (1.0 - b))).collect();
        let trace = Trace {
            times_ps: times.to_vec(),
            cos2: axis(align),
            cos2_2d: abs_align,
            orientation,
            body_axes: Some(crate::observe::BodyAxes { a: axis(0), b: axis(1), c: axis(2), three_axis, ..Default::default() }),
            ..Default::default()
        };
        let mut sums = crate::observe::LevelSums::new(vec![], f64::INFINITY, false);
        sums.cos2_static = perm_align;
        sums.abscos_static = permanent[1];
        Ok(RunResult {
            trace,
            permanent_cos2: perm_align,
            permanent_cos2_2d: permanent[1],
            blocks: reports,
            events,
            final_sums: FreeSums::Levels(sums),
            permanent_cos: Some(permanent[2]),
        })
    }
}
