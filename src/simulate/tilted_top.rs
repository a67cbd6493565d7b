//! Symmetric and asymmetric tops in a static field at an angle α to Z in the XZ plane, with laser pulses
//! of any polarization in that plane (linear along Z, tilted, elliptical): mixed-field orientation of
//! tops with a tilted static field. No rotation leaves both fields unchanged, so M is not conserved and
//! a block holds every |J K M⟩ of its class up to a top J.
//!
//! Frame: the dipole axis is the body z axis (the frame of the oriented tops). Symmetries kept, each exact:
//! - the two-fold rotation about the dipole axis, C₂(z)|J K M⟩ = (−1)^K |J K M⟩: the polarizability
//!   tensor is diagonal in the principal frame and the dipole lies on a principal axis, so every coupling
//!   changes K by an even number (a symmetric top conserves K itself, up to its sign, below);
//! - the reflection σ through the lab XZ plane, which leaves every field in that plane unchanged, combined
//!   with the reflection σ_b through the body xz plane, which leaves the molecule's tensors unchanged: the
//!   map R → σ R σ_b of rotations is (φ, θ, χ) → (−φ, θ, −χ) in z-y-z Euler angles, so with
//!   ψ_JKM ∝ D^J_{MK}* it acts as σ'|J K M⟩ = (−1)^{M−K} |J −K −M⟩. Blocks are spanned by
//!   (|J K M⟩ + s(−1)^{M−K}|J −K −M⟩)/√2 for M > 0, or M = 0 and K > 0, and |J 0 0⟩ alone (s = +1).
//!   ⟨cosθ_Y⟩ of the dipole axis changes sign under σ', so it vanishes exactly.
//!
//! A static field on from the start was met adiabatically: alone it is symmetric about its own axis, so
//! its dressed states are those of the oriented tops (field along Z, ranked within M, the parity of K
//! and at M = 0 the reflection through a plane containing Z), rotated by α about Y:
//! |J K M_f⟩_f = Σ_M d^J_{M M_f}(α) |J K M⟩. A dressed level of M_f > 0 and its mirror image at −M_f
//! form one σ' = +1 and one σ' = −1 state of the same population.
//!
//! Slow pulses (every envelope time scale ≥ 5 ps, or `solver.frame_steps`) and a static field alone are
//! stepped in the instantaneous frame instead, below an energy cut (`tilted_top_frame`).
//!
//! Propagation: the basis functions' field-free eigenstates (per J and M) carry free phases; every step
//! of the one finite interval that covers the static field's span is the fourth-order splitting of the
//! other kernels with a Chebyshev kick of the laser and static couplings in the function basis. Samples
//! are taken from the propagated states; a field-free stretch (the static field switched off) is sampled
//! by free phases from the state at its start.

use super::driver::{Kernel, TILTED_TOP_STEP, grow_basis, walk};
use super::oriented_top::{DressedStart, OrientedTopSolver};
use super::tilted::{laser_angles, laser_weights};
use super::tilted_top_frame::{FRAME_MIN_TIME_SCALE_PS, FrameKernel, FrameOps, FrameRun};
use super::top::{kick_through_groups, to_functions_t};
use super::{BlockReport, Event, RunResult};
use crate::basis::BlockSymmetry;
use crate::basis::lab::{LabAxis, LabOperator, body_square, factored_operator, lab_pair};
use crate::basis::top::TopFrame;
use crate::basis::wigner::small_d_series;
use crate::error::{Error, Result};
use crate::field::FieldModel;
use crate::molecule::top::{BodyAxis, Top};
use crate::numeric::sorted_eigen;
use crate::observe::{BodyAxes, LabAxisSeries, LevelSums, Orientation, Trace};
use crate::propagate::sparse::{Csr, with_scratch};
use crate::propagate::{BlockState, FiniteSpan, FreePhases, propagate_finite};
use crate::scenario::SolverSettings;
use crate::units::{cm_to_rad_per_ps, dipole_rate_rad_per_ps};
use nalgebra::DMatrix;
use rayon::prelude::*;
use std::collections::HashMap;
use std::sync::{Arc, Mutex};

/// Largest J a block may reach; beyond it the run is refused, not truncated.
pub const MAX_TILTED_TOP_J: i64 = 60;

/// Population below which a start level is left out of the tilted-field runs (summed over every level so
/// left out it stays many orders below any thermal tolerance).
const NEGLIGIBLE_POPULATION: f64 = 1e-24;

/// Initial states propagated together (one set of products per step).
const CHUNK: usize = 16;

/// Lab axes in the order of the observables.
const LAB: [LabAxis; 3] = [LabAxis::X, LabAxis::Y, LabAxis::Z];

/// Observables: ⟨Φ_Fi²⟩ at 3F + i (lab axis F of `LAB`, frame position i: 0 = z, 1 = x, 2 = y), then
/// ⟨Φ_Xz⟩ and ⟨Φ_Zz⟩ of the dipole axis z.
pub(super) const COS_X_INDEX: usize = 9;
pub(super) const COS_Z_INDEX: usize = 10;
pub(super) const OBSERVABLES: usize = 11;

/// Coupling parts on one pattern: the laser couplings Σ_i w_i Φ_Fi Φ_F'i for (F, F') = ZZ, XX and
/// XZ + ZX, the dipole couplings Φ_Zz and Φ_Xz, the identity and the field-free Hamiltonian (rad/ps).
pub(super) const ZZ: usize = 0;
pub(super) const XX: usize = 1;
pub(super) const XZ: usize = 2;
pub(super) const DIP_Z: usize = 3;
pub(super) const DIP_X: usize = 4;
const IDENTITY: usize = 5;
const H0: usize = 6;

/// Longest phase range (rad) one Chebyshev series of a quiet stretch spans; longer stretches take several.
const QUIET_THETA: f64 = 200.0;

/// A primitive symmetric-top function (J, K, M).
pub(super) type Prim = (i64, i64, i64);

/// The values of K a class holds: one parity of K (asymmetric tops), or ±k (symmetric tops).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub(crate) enum KSet {
    Parity(i64),
    Abs(i64),
}

impl KSet {
    fn contains(self, k: i64) -> bool {
        match self {
            KSet::Parity(p) => k.rem_euclid(2) == p,
            KSet::Abs(a) => k.abs() == a,
        }
    }

    /// The set holding K, for a symmetric (K conserved) or asymmetric top.
    fn of(symmetric: bool, k: i64) -> KSet {
        if symmetric { KSet::Abs(k.abs()) } else { KSet::Parity(k.rem_euclid(2)) }
    }

    fn label(self) -> BlockSymmetry {
        match self {
            KSet::Parity(p) => BlockSymmetry::KParity(p),
            KSet::Abs(k) => BlockSymmetry::K(k),
        }
    }
}

/// One exact symmetry class: the K values and the sign s of σ'.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub(crate) struct Class {
    pub kset: KSet,
    pub sigma: i64,
}

impl Class {
    /// A fixed order of the classes (by K set, then σ' = +1 first).
    pub(super) fn order(&self) -> (i64, i64) {
        let k = match self.kset {
            KSet::Parity(p) => p,
            KSet::Abs(k) => k,
        };
        (k, -self.sigma)
    }

    /// True if (K, M) labels a basis function of the class (M > 0, or M = 0 and K > 0, or K = M = 0 at s = +1).
    fn is_rep(&self, k: i64, m: i64) -> bool {
        self.kset.contains(k) && (m > 0 || (m == 0 && k > 0) || (m == 0 && k == 0 && self.sigma > 0))
    }

    /// The class's functions of one J, by M then K.
    fn functions_of_j(&self, j: i64) -> Vec<Prim> {
        (0..=j).flat_map(|m| (-j..=j).filter(move |&k| self.is_rep(k, m)).map(move |k| (j, k, m))).collect()
    }

    /// Primitive components of the function labelled `f`.
    fn components(&self, f: Prim) -> ([(Prim, f64); 2], usize) {
        let (j, k, m) = f;
        if k == 0 && m == 0 {
            return ([(f, 1.0), (f, 0.0)], 1);
        }
        let h = std::f64::consts::FRAC_1_SQRT_2;
        let phase = self.sigma as f64 * if (m - k).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
        ([(f, h), ((j, -k, -m), phase * h)], 2)
    }
}

/// Operators of one class up to a top J, in the basis functions; states live in the field-free
/// eigenstates of each (J, M) group.
pub(crate) struct TiltedTopOps {
    pub(super) class: Class,
    pub(super) j_max: i64,
    functions: Vec<Prim>,
    /// Primitive function → (index of the basis function holding it, its coefficient there).
    index: HashMap<Prim, (usize, f64)>,
    /// (first index, length, eigenvector matrix) of each (J, M) group.
    pub(super) groups: Vec<(usize, usize, usize)>,
    pub(super) vectors: Vec<DMatrix<f64>>,
    pub(super) omega: Vec<f64>,
    pub(super) parts: Vec<Csr>,
    pub(super) observables: Vec<Csr>,
    /// Largest angular frequency of a transition the couplings drive, rad/ps.
    fastest: f64,
    edge_states: usize,
}

/// Σ c·O of operators as one (for matrix elements in one pass).
fn combine(ops: &[(LabOperator, f64)]) -> LabOperator {
    let mut out = LabOperator { identity: 0.0, terms: vec![] };
    for (o, w) in ops {
        out.identity += w * o.identity;
        out.terms.extend(o.terms.iter().map(|&(r, p, q, c)| (r, p, q, c * *w)));
    }
    out
}

/// Φ_F1i Φ_F2i for frame position i (exact: a finite Clebsch–Gordan series).
fn square(f1: LabAxis, f2: LabAxis, position: usize) -> LabOperator {
    factored_operator(&lab_pair(f1, f2), &body_square(position))
}

impl TiltedTopOps {
    pub(crate) fn new(top: &Top, frame: &TopFrame, class: Class, j_max: i64) -> TiltedTopOps {
        let functions: Vec<Prim> = (0..=j_max).flat_map(|j| class.functions_of_j(j)).collect();
        let n = functions.len();
        let mut index = HashMap::with_capacity(2 * n);
        for (i, &f) in functions.iter().enumerate() {
            let (comps, nc) = class.components(f);
            for &(p, c) in &comps[..nc] {
                index.insert(p, (i, c));
            }
        }
        // Field-free eigenstates per (J, M): the same matrix for every M > 0 of a J.
        let mut groups = vec![];
        let mut vectors: Vec<DMatrix<f64>> = vec![];
        let mut levels: Vec<Vec<f64>> = vec![];
        let mut known: HashMap<(i64, bool), usize> = HashMap::new();
        let mut omega = vec![0.0; n];
        let mut diagonal = vec![0.0; n];
        let mut h0: Vec<(usize, usize, f64)> = vec![];
        let mut start = 0;
        while start < n {
            let (j, _, m) = functions[start];
            let len = functions[start..].iter().take_while(|f| f.0 == j && f.2 == m).count();
            let h = DMatrix::from_fn(len, len, |r, c| {
                let (a, na) = class.components(functions[start + r]);
                let (b, nb) = class.components(functions[start + c]);
                let mut v = 0.0;
                for &(pa, ca) in &a[..na] {
                    for &(pb, cb) in &b[..nb] {
                        if pa.2 == pb.2 {
                            v += ca * cb * frame.h0(j, pa.1, pb.1);
                        }
                    }
                }
                v
            });
            for r in 0..len {
                diagonal[start + r] = cm_to_rad_per_ps(h[(r, r)]);
                for c in 0..len {
                    if h[(r, c)] != 0.0 {
                        h0.push((start + r, start + c, cm_to_rad_per_ps(h[(r, c)])));
                    }
                }
            }
            let slot = match known.get(&(j, m == 0)) {
                Some(&slot) => slot,
                None => {
                    let (vals, vecs) = sorted_eigen(h);
                    vectors.push(vecs);
                    levels.push(vals.iter().map(|e| cm_to_rad_per_ps(*e)).collect());
                    known.insert((j, m == 0), vectors.len() - 1);
                    vectors.len() - 1
                }
            };
            omega[start..start + len].copy_from_slice(&levels[slot]);
            groups.push((start, len, slot));
            start += len;
        }
        let weights: Vec<f64> = {
            let da = top.delta_alpha_a3();
            let a_min = top.polarizability_a3.iter().cloned().fold(f64::MAX, f64::min);
            (0..3).map(|pos| if da > 0.0 { (top.alpha(frame.axes[pos]) - a_min) / da } else { 0.0 }).collect()
        };
        let laser = |f1: LabAxis, f2: LabAxis| -> LabOperator {
            let mut parts: Vec<(LabOperator, f64)> = (0..3).map(|i| (square(f1, f2, i), weights[i])).collect();
            if f1 != f2 {
                parts.extend((0..3).map(|i| (square(f2, f1, i), weights[i])));
            }
            combine(&parts)
        };
        let coupling_ops = [
            laser(LabAxis::Z, LabAxis::Z),
            laser(LabAxis::X, LabAxis::X),
            laser(LabAxis::X, LabAxis::Z),
            LabOperator::direction_cosine(LabAxis::Z, 0),
            LabOperator::direction_cosine(LabAxis::X, 0),
        ];
        let mut ops = TiltedTopOps { class, j_max, functions, index, groups, vectors, omega, parts: vec![], observables: vec![], fastest: 0.0, edge_states: 0 };
        let coupling: Vec<Vec<(usize, usize, f64)>> = coupling_ops.iter().map(|o| ops.triplets(o)).collect();
        let mut fastest: f64 = 0.0;
        for t in &coupling {
            for &(a, b, v) in t {
                if v.abs() > 1e-3 {
                    fastest = fastest.max((diagonal[a] - diagonal[b]).abs());
                }
            }
        }
        let identity: Vec<(usize, usize, f64)> = (0..n).map(|i| (i, i, 1.0)).collect();
        let positions: Vec<(usize, usize)> = coupling.iter().flatten().chain(&h0).map(|t| (t.0, t.1)).chain((0..n).map(|i| (i, i))).collect();
        let on_pattern = |own: &[(usize, usize, f64)]| {
            let mut t: Vec<(usize, usize, f64)> = positions.iter().map(|&(r, c)| (r, c, 0.0)).collect();
            t.extend_from_slice(own);
            Csr::from_triplets(n, t)
        };
        ops.parts = coupling.iter().map(|t| on_pattern(t)).chain([on_pattern(&identity), on_pattern(&h0)]).collect();
        let mut observables: Vec<Csr> = vec![];
        for f in LAB {
            for i in 0..3 {
                observables.push(Csr::from_triplets(n, ops.triplets(&square(f, f, i))));
            }
        }
        observables.push(Csr::from_triplets(n, ops.triplets(&LabOperator::direction_cosine(LabAxis::X, 0))));
        observables.push(Csr::from_triplets(n, ops.triplets(&LabOperator::direction_cosine(LabAxis::Z, 0))));
        ops.observables = observables;
        ops.fastest = fastest;
        ops.edge_states = ops.functions.iter().filter(|f| f.0 >= j_max - 1).count();
        ops
    }

    pub(super) fn size(&self) -> usize {
        self.functions.len()
    }

    /// M of the field-free eigenstate `i` (every state of a (J, M) group has the group's M ≥ 0).
    pub(super) fn m_of(&self, i: usize) -> i64 {
        let &(start, _, _) = self.groups.iter().find(|g| i >= g.0 && i < g.0 + g.1).expect("every eigenstate lies in a group");
        self.functions[start].2
    }

    /// The rotation by π about the lab X axis in the basis functions, a signed permutation:
    /// C₂(X)|J K M⟩ = (−1)^J |J K −M⟩ (d^J_{M'M}(π) = (−1)^{J−M} δ_{M',−M} about Y, turned to X by
    /// e^{∓iπJ_Z/2}), so the function of (K, M > 0) goes to s(−1)^{J+M−K} times that of (−K, M) and one of
    /// M = 0 to (−1)^J times itself. It maps every class into itself (it commutes with σ' and with body
    /// rotations) and is a symmetry when the laser is along Z and the static field along X.
    pub(super) fn rotation_x_pi(&self) -> Csr {
        let t = self
            .functions
            .iter()
            .enumerate()
            .map(|(i, &(j, k, m))| {
                let sign_j = if j % 2 == 0 { 1.0 } else { -1.0 };
                if m == 0 {
                    (i, i, sign_j)
                } else {
                    let phase = if (m - k).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
                    let (g, _) = self.index[&(j, -k, m)];
                    (g, i, sign_j * self.class.sigma as f64 * phase)
                }
            })
            .collect();
        Csr::from_triplets(self.size(), t)
    }

    /// Non-zero elements (row, column, value) of `op` between the basis functions (real for operators
    /// built from fields in the XZ plane and tensors invariant under σ_b).
    fn triplets(&self, op: &LabOperator) -> Vec<(usize, usize, f64)> {
        let mut acc: HashMap<(usize, usize), f64> = HashMap::new();
        let mut cands: Vec<Prim> = vec![];
        for (b, &f) in self.functions.iter().enumerate() {
            let (comps, nc) = self.class.components(f);
            for &(ket, cb) in &comps[..nc] {
                let (j, k, m) = ket;
                cands.clear();
                if op.identity != 0.0 {
                    cands.push(ket);
                }
                for &(r, p, q, _) in &op.terms {
                    for jp in (j - r).max(0)..=(j + r).min(self.j_max) {
                        let (kp, mp) = (k + q, m + p);
                        if kp.abs() <= jp && mp.abs() <= jp {
                            cands.push((jp, kp, mp));
                        }
                    }
                }
                cands.sort_unstable();
                cands.dedup();
                for &bra in &cands {
                    let Some(&(a, ca)) = self.index.get(&bra) else { continue };
                    let v = op.element(bra, ket);
                    if v.re == 0.0 {
                        continue;
                    }
                    debug_assert!(v.im.abs() < 1e-12, "imaginary element {v} of a real operator");
                    *acc.entry((a, b)).or_insert(0.0) += ca * cb * v.re;
                }
            }
        }
        let mut out: Vec<(usize, usize, f64)> = acc.into_iter().filter(|e| e.1.abs() > 1e-15).map(|((a, b), v)| (a, b, v)).collect();
        out.sort_unstable_by_key(|t| (t.0, t.1));
        out
    }

    /// The groups as (first index, length, eigenvectors) for the function-basis transforms.
    fn group_views(&self) -> Vec<(usize, usize, &DMatrix<f64>)> {
        self.groups.iter().map(|&(s, len, v)| (s, len, &self.vectors[v])).collect()
    }

    /// ψ ← exp(i(Σ w·laser parts + θ_s S)) ψ (up to a global phase), laser weights (ZZ, XX, XZ) of an
    /// operator with spectrum in [0, `laser_total`] and a static part of spectrum in [−|θ_s|, |θ_s|].
    fn kick(&self, st: &mut BlockState, laser: [f64; 3], laser_total: f64, theta_s: f64, angle_rad: f64, combined: &mut Csr) {
        let lo = laser_total.min(0.0) - theta_s.abs();
        let hi = laser_total.max(0.0) + theta_s.abs();
        let width = hi - lo;
        if width == 0.0 {
            return;
        }
        let (sn, cs) = angle_rad.sin_cos();
        combined.set_combination(&[
            (&self.parts[ZZ], laser[0] / width),
            (&self.parts[XX], laser[1] / width),
            (&self.parts[XZ], laser[2] / width),
            (&self.parts[DIP_Z], theta_s * cs / width),
            (&self.parts[DIP_X], theta_s * sn / width),
            (&self.parts[IDENTITY], -lo / width),
        ]);
        kick_through_groups(&self.group_views(), combined, st, width);
    }

    /// ψ ← exp(−i(H0 − s(cosα Φ_Zz + sinα Φ_Xz)) dt) ψ (up to a global phase): a stretch with the static
    /// field (rate `s`, rad/ps) and no pulse, exact in the basis (Chebyshev series of the whole Hamiltonian,
    /// whose spectrum lies within [ω_min − |s|, ω_max + |s|]: the direction cosines have norm at most 1).
    fn quiet(&self, st: &mut BlockState, s: f64, angle_rad: f64, dt: f64, combined: &mut Csr) {
        let w_min = self.omega.iter().copied().fold(f64::INFINITY, f64::min);
        let w_max = self.omega.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        // exp(−iH dt) = exp(i dt·(−H)), −H with spectrum in [lo, hi].
        let (lo, hi) = (-w_max - s.abs(), -w_min + s.abs());
        let width = hi - lo;
        if width == 0.0 || dt == 0.0 {
            return;
        }
        let (sn, cs) = angle_rad.sin_cos();
        combined.set_combination(&[
            (&self.parts[H0], -1.0 / width),
            (&self.parts[DIP_Z], s * cs / width),
            (&self.parts[DIP_X], s * sn / width),
            (&self.parts[IDENTITY], -lo / width),
        ]);
        let pieces = (width * dt / QUIET_THETA).ceil().max(1.0);
        for _ in 0..pieces as usize {
            kick_through_groups(&self.group_views(), combined, st, width * dt / pieces);
        }
    }

    /// Σ_c p_c ⟨ψ_c|O|ψ_c⟩ for every observable.
    fn sample(&self, st: &BlockState, pops: &[f64], out: &mut [f64]) {
        let (n, cols) = st.psi.shape();
        let k = st.k;
        with_scratch(n * cols, |f| {
            to_functions_t(&self.group_views(), &st.psi, f);
            for (o, x) in self.observables.iter().zip(out.iter_mut()) {
                let q = o.quadratic_forms_t(f, cols);
                *x = pops.iter().enumerate().map(|(c, p)| p * (q[c] + q[c + k])).sum();
            }
        });
    }

    /// The columns (function basis) of states given as coefficients on basis functions, in eigenstates.
    pub(super) fn eigen_columns(&self, cols: &[Vec<(Prim, f64)>]) -> DMatrix<f64> {
        let n = self.size();
        let mut f = DMatrix::zeros(n, cols.len());
        for (c, col) in cols.iter().enumerate() {
            for &(p, v) in col {
                if let Some(&(i, _)) = self.index.get(&p) {
                    f[(i, c)] += v;
                }
            }
        }
        let mut out = DMatrix::zeros(n, cols.len());
        for &(s, len, v) in &self.group_views() {
            let block = v.transpose() * f.rows(s, len);
            out.rows_mut(s, len).copy_from(&block);
        }
        out
    }
}

/// What the chunks (or classes) of one run share.
pub(super) struct TiltedTopRun<'a> {
    pub field: &'a FieldModel,
    pub dipole_debye: f64,
    pub delta_alpha_a3: f64,
    pub angle_rad: f64,
    pub settings: &'a SolverSettings,
    pub breaks: Vec<f64>,
}

impl TiltedTopRun<'_> {
    /// The static field's coupling rate μE(t)/ħ, rad/ps.
    pub(super) fn static_rate(&self, t_ps: f64) -> f64 {
        self.field.static_field.map(|s| dipole_rate_rad_per_ps(self.dipole_debye, s.strength_at(t_ps))).unwrap_or(0.0)
    }
}

struct TiltedTopKernel<'a> {
    ops: &'a TiltedTopOps,
    run: &'a TiltedTopRun<'a>,
    pops: Vec<f64>,
    combined: std::cell::RefCell<Csr>,
}

impl Kernel for TiltedTopKernel<'_> {
    type Item = Event;
    /// A field-free stretch keeps the state at its start.
    type Stretch = BlockState;

    fn observables(&self) -> usize {
        OBSERVABLES
    }

    fn omega(&self) -> &[f64] {
        &self.ops.omega
    }

    fn edge(&self, st: &BlockState) -> f64 {
        st.edge_population(self.ops.edge_states)
    }

    fn sample(&self, st: &BlockState, out: &mut [f64]) {
        self.ops.sample(st, &self.pops, out);
    }

    fn stretch(&self, st: &BlockState) -> BlockState {
        st.clone()
    }

    fn free(&self, st: &mut BlockState, _index: usize, dt: f64) {
        st.free_with(&FreePhases::from_omega(&self.ops.omega, dt));
    }

    fn instant(&self, st: &mut BlockState, item: &Event) {
        if let Event::Kick { pulse, strength, .. } = item {
            let w = laser_weights(&self.run.field.pulses[*pulse].polarization);
            self.ops.kick(st, w.map(|x| x * strength), *strength, 0.0, self.run.angle_rad, &mut self.combined.borrow_mut());
        }
    }

    fn finite_kick(&self, _index: usize, item: &Event, st: &mut BlockState, t: f64, h: f64) {
        let Event::Finite { pulses, .. } = item else { return };
        let (laser, total) = laser_angles(self.run.field, pulses, self.run.delta_alpha_a3, t, h);
        let theta_s = h * self.run.static_rate(t);
        self.ops.kick(st, laser, total, theta_s, self.run.angle_rad, &mut self.combined.borrow_mut());
    }

    fn breaks(&self, _item: &Event) -> Vec<f64> {
        self.run.breaks.clone()
    }

    /// Whole marks (samples, breaks) at a time: see [`Kernel::own_step`].
    fn step(&self, _step_ps: f64) -> f64 {
        f64::INFINITY
    }

    fn steps_itself(&self) -> bool {
        true
    }

    /// From the state's time to the next sample or break (`max_ps`): exactly, in one Chebyshev series of
    /// the whole Hamiltonian, when no pulse reaches into the stretch (the static field alone, constant
    /// between breaks: a static field stays on for the whole window, and splitting steps would have to
    /// resolve the fastest transition of the basis all along); else by the splitting steps.
    fn own_step(&self, index: usize, item: &Event, st: &mut BlockState, max_ps: f64) -> f64 {
        let Event::Finite { pulses, step_ps, .. } = item else {
            self.free(st, index, max_ps);
            return max_ps;
        };
        let (t0, t1) = (st.t_ps, st.t_ps + max_ps);
        let field = self.run.field;
        let quiet = pulses.iter().all(|&i| {
            let (a, b) = field.pulses[i].support_ps();
            b <= t0 || a >= t1
        });
        // Read just inside the stretch: a switch falls on its ends, and its value belongs to one side.
        let inside = 1e-9 * max_ps;
        let s = self.run.static_rate(t0 + inside);
        if quiet && s == self.run.static_rate(t1 - inside) {
            if s == 0.0 {
                self.free(st, index, max_ps);
            } else {
                self.ops.quiet(st, s, self.run.angle_rad, max_ps, &mut self.combined.borrow_mut());
                st.t_ps = t1;
            }
            return max_ps;
        }
        let span = FiniteSpan { end_ps: t1, max_step_ps: self.split_step(*step_ps), stops: &[], breaks: &[] };
        propagate_finite(st, &self.ops.omega, &mut |st: &mut BlockState, t: f64, h: f64| self.finite_kick(index, item, st, t, h), span, |_, _| {});
        max_ps
    }
}

impl TiltedTopKernel<'_> {
    /// The splitting step inside pulses (ps), from the schedule's `step_ps`.
    fn split_step(&self, step_ps: f64) -> f64 {
        let s_max = self.run.field.static_field.map(|s| dipole_rate_rad_per_ps(self.run.dipole_debye, s.strength_kv_cm).abs()).unwrap_or(0.0);
        let step = TILTED_TOP_STEP.in_block(self.run.settings, step_ps, self.ops.fastest);
        if self.run.settings.step_fs.is_some() || s_max == 0.0 { step } else { step.min(TILTED_TOP_STEP.coupling / s_max) }
    }
}

/// One initial state: coefficients on the basis functions of its class, its population and its top J,
/// and the field-free level it came from (J, name, |M_f| about the static field).
pub(super) struct Column {
    pub coefficients: Vec<(Prim, f64)>,
    pub population: f64,
    pub j_top: i64,
    pub j: i64,
    pub label: String,
    pub m: i64,
}

/// The dressed levels along the static field, rotated by α about Y and split into the σ' classes.
pub(super) fn class_columns(starts: &[DressedStart], symmetric: bool, angle_rad: f64) -> HashMap<Class, Vec<Column>> {
    let j_top = starts.iter().flat_map(|s| s.amplitudes.iter().map(|a| a.0.0)).max().unwrap_or(0);
    let mut d_cache: HashMap<(i64, i64), Vec<f64>> = HashMap::new();
    let mut out: HashMap<Class, Vec<Column>> = HashMap::new();
    for s in starts {
        // Levels the ensemble holds only because they share a J with populated ones (high K of a cold top,
        // at e^-50 and below) change no digit of any output but would set the basis: left out.
        if s.population < NEGLIGIBLE_POPULATION {
            continue;
        }
        let Some(&((_, k0), _)) = s.amplitudes.iter().find(|a| a.1 != 0.0) else { continue };
        let kset = KSet::of(symmetric, k0);
        for sigma in [1i64, -1] {
            let class = Class { kset, sigma };
            let mut coef: HashMap<Prim, f64> = HashMap::new();
            for &((j, k), a) in &s.amplitudes {
                for m in -j..=j {
                    let d = d_cache.entry((m, s.m)).or_insert_with(|| small_d_series(m, s.m, angle_rad, j_top))[j as usize];
                    // The primitive |J K M⟩ with amplitude a·d lies in the function of (K, M) or of its mirror.
                    let (f, c) = if class.is_rep(k, m) {
                        ((j, k, m), if k == 0 && m == 0 { 1.0 } else { std::f64::consts::FRAC_1_SQRT_2 })
                    } else if class.is_rep(-k, -m) {
                        let sign = if (m - k).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
                        ((j, -k, -m), sigma as f64 * sign * std::f64::consts::FRAC_1_SQRT_2)
                    } else {
                        continue;
                    };
                    *coef.entry(f).or_insert(0.0) += c * a * d;
                }
            }
            let norm2: f64 = coef.values().map(|v| v * v).sum();
            if norm2 < 1e-12 {
                continue;
            }
            let scale = norm2.sqrt().recip();
            let mut coefficients: Vec<(Prim, f64)> = coef.into_iter().filter(|e| e.1 != 0.0).map(|(p, v)| (p, v * scale)).collect();
            coefficients.sort_by_key(|e| e.0);
            // The top J that holds all but 1e-10 of the state (the dressed tails need no room of their own).
            let mut by_j: Vec<(i64, f64)> = coefficients.iter().map(|e| (e.0.0, e.1 * e.1)).collect();
            by_j.sort_by_key(|e| std::cmp::Reverse(e.0));
            let mut tail = 0.0;
            let mut top = 0;
            for (j, w) in by_j {
                tail += w;
                if tail > 1e-10 {
                    top = j;
                    break;
                }
            }
            out.entry(class).or_default().push(Column { coefficients, population: s.population * norm2, j_top: top, j: s.j, label: s.label.clone(), m: s.m });
        }
    }
    out
}

/// What one chunk returns.
struct ChunkOutcome {
    values: Vec<Vec<f64>>,
    class: Class,
    j_max: i64,
    size: usize,
    edge: f64,
}

/// The operators of the classes, cached per (class, top J).
#[derive(Default)]
pub(crate) struct TiltedTopCache {
    ops: Mutex<HashMap<(Class, i64), Arc<TiltedTopOps>>>,
}

impl TiltedTopCache {
    pub(super) fn get(&self, top: &Top, frame: &TopFrame, class: Class, j_max: i64) -> Arc<TiltedTopOps> {
        if let Some(o) = self.ops.lock().expect("tilted top cache").get(&(class, j_max)) {
            return o.clone();
        }
        let o = Arc::new(TiltedTopOps::new(top, frame, class, j_max));
        let mut cache = self.ops.lock().expect("tilted top cache");
        if cache.len() >= 8 {
            cache.clear();
        }
        cache.insert((class, j_max), o.clone());
        o
    }
}

/// Run a top in a tilted static field (and laser pulses of any polarization in the XZ plane), sampling
/// at `times` (ascending).
pub(super) fn run(solver: &OrientedTopSolver, cache: &TiltedTopCache, field: &FieldModel, times: &[f64], progress: &super::RunProgress) -> Result<RunResult> {
    if !field.two_colour.is_empty() || !field.terahertz.is_empty() {
        return Err(Error::input(
            "static_field.angle_deg",
            "a static field at an angle to Z (or pulses polarized away from Z with a static field) cannot yet be combined with two-colour or terahertz pulses; expected angle_deg 0 and pulses along Z",
        ));
    }
    let top = solver.top();
    let frame = solver.frame();
    let settings = solver.settings();
    let axis = solver.axis();
    // Room above the thermal levels: every M of every J is in one basis (cost ∝ J⁴ with the steps), so
    // start tight as the all-M chunks do and let the edge check grow the basis; the static-field mixing
    // is already in the dressed states.
    solver.reach(field)?; // its refusals of fields no top basis holds
    let reach = (0.8 * super::top::laser_strengths(top, field)).ceil() as i64 + 6;
    let (events, t_first) = solver.plan(field, times)?;
    let cap = MAX_TILTED_TOP_J;
    let refuse = || {
        Error::input(
            if field.pulses.is_empty() { "static_field.strength_kv_cm" } else { "pulses" },
            format!("the fields and temperature would need the tilted-field basis of a top beyond J = {cap}; expected weaker fields or a lower temperature"),
        )
    };
    // The thermal levels alone (before the static field mixes them) must leave room for the pulses.
    if solver.thermal_j_max() + reach > cap {
        return Err(refuse());
    }
    let angle_rad = field.static_field.map(|s| s.angle_deg.to_radians()).unwrap_or(0.0);
    let switches: Vec<f64> = field.static_field.map(|s| s.on_ps.into_iter().chain(s.off_ps).collect()).unwrap_or_default();
    let mut breaks: Vec<f64> = field.pulses.iter().flat_map(|p| p.breakpoints_ps()).collect();
    breaks.extend(switches.iter().copied());
    let run = TiltedTopRun { field, dipole_debye: axis.dipole_debye, delta_alpha_a3: axis.delta_alpha_a3, angle_rad, settings, breaks };
    // The field the molecules arrived in: on from the start (no on_ps) and not yet switched off.
    let arrived_in = field.static_field.filter(|s| s.on_ps.is_none() && s.off_ps.is_none_or(|o| o >= t_first));
    let s0 = arrived_in.map(|s| dipole_rate_rad_per_ps(axis.dipole_debye, s.strength_kv_cm)).unwrap_or(0.0);
    let starts = solver.dressed_starts(s0)?;
    let mut by_class: Vec<(Class, Vec<Column>)> = class_columns(&starts, frame.symmetric, angle_rad).into_iter().collect();
    by_class.sort_by_key(|(c, _)| c.order());
    if in_frame(field, settings) {
        let outcomes = run_classes_in_frame(top, frame, cache, &run, &by_class, &events, times, t_first, progress)?;
        return Ok(collect_outcomes(top, frame, times, outcomes, events));
    }
    let mut chunks: Vec<(Class, Vec<Column>)> = vec![];
    for (class, mut cols) in by_class {
        cols.sort_by_key(|c| c.j_top);
        let mut rest = cols;
        while !rest.is_empty() {
            let tail = rest.split_off(rest.len().min(CHUNK));
            chunks.push((class, rest));
            rest = tail;
        }
    }
    let j_thermal = chunks.iter().flat_map(|c| c.1.iter().map(|x| x.j_top)).max().unwrap_or(0);
    if j_thermal + reach > cap {
        return Err(refuse());
    }
    let largest = {
        let j = (j_thermal + reach) as f64;
        // States of one class up to J: Σ (2J + 1)²/4 ≈ (J + 1)³/3 for one parity of K, Σ (2J + 1) ≈ (J + 1)²
        // for ±K of a symmetric top.
        if frame.symmetric { (j + 1.0).powi(2) } else { (j + 1.0).powi(3) / 3.0 }
    };
    // Coupling parts and observables (about 17 stored matrices of ~70 elements a row) per cached class.
    crate::resources::check_memory(
        largest * 70.0 * 17.0 * 16.0 * 4.0,
        "temperature_k",
        &format!("the tilted-field basis of a top up to J = {} (about {largest:.0} states a class)", j_thermal + reach),
    )?;
    progress.plan(chunks.len());
    let outcomes: Vec<ChunkOutcome> = chunks
        .par_iter()
        .map(|(class, cols)| {
            let first = cols.iter().map(|c| c.j_top).max().unwrap_or(0) + reach;
            let r = grow_basis(
                first as usize,
                cap as usize,
                |j_max| {
                    let ops = cache.get(top, frame, *class, j_max as i64);
                    Ok(try_chunk(&ops, cols, &run, &events, times, t_first))
                },
                || Error::Numerical(format!("tilted static field on a top: the basis would need J > {cap}; lower the field strengths or the temperature")),
            );
            progress.finish_one();
            r
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(collect_outcomes(top, frame, times, outcomes, events))
}

/// The run's result from the outcomes of its chunks.
fn collect_outcomes(top: &Top, frame: &TopFrame, times: &[f64], outcomes: Vec<ChunkOutcome>, events: Vec<Event>) -> RunResult {
    let mut values = vec![vec![0.0; times.len()]; OBSERVABLES];
    let mut reports: Vec<BlockReport> = vec![];
    for o in &outcomes {
        for (acc, v) in values.iter_mut().zip(&o.values) {
            for (a, b) in acc.iter_mut().zip(v) {
                *a += b;
            }
        }
        let label = BlockSymmetry::KReflectionXZ { class: Box::new(o.class.kset.label()), sigma: o.class.sigma };
        match reports.iter_mut().find(|r| r.parity == label) {
            Some(r) => {
                r.j_max = r.j_max.max(o.j_max as u32);
                r.size = r.size.max(o.size);
                r.edge_population = r.edge_population.max(o.edge);
            }
            None => reports.push(BlockReport { m: 0, parity: label, j_max: o.j_max as u32, size: o.size, edge_population: o.edge }),
        }
    }
    assemble(top, frame, times, values, reports, events)
}

/// The run's trace from the summed observables.
fn assemble(top: &Top, frame: &TopFrame, times: &[f64], values: Vec<Vec<f64>>, reports: Vec<BlockReport>, events: Vec<Event>) -> RunResult {
    let series = |f: usize, axis: BodyAxis| values[3 * f + frame.position(axis)].clone();
    let mut lab_axes = vec![];
    for (f, lab) in LAB.into_iter().enumerate() {
        for axis in [BodyAxis::A, BodyAxis::B, BodyAxis::C] {
            lab_axes.push(LabAxisSeries::new(lab, Some(axis), series(f, axis)));
        }
    }
    let d = top.dipole_axis;
    let lab_cos = vec![
        LabAxisSeries::cosine(LabAxis::X, Some(d), values[COS_X_INDEX].clone()),
        LabAxisSeries::cosine(LabAxis::Y, Some(d), vec![0.0; times.len()]),
        LabAxisSeries::cosine(LabAxis::Z, Some(d), values[COS_Z_INDEX].clone()),
    ];
    let align = series(2, top.alignment_axis);
    let second_x = series(0, top.second_axis());
    let body_axes = BodyAxes {
        a: series(2, BodyAxis::A),
        b: series(2, BodyAxis::B),
        c: series(2, BodyAxis::C),
        three_axis: align.iter().zip(&second_x).map(|(a, b)| a.min(*b)).collect(),
        three_axis_oriented: values[COS_Z_INDEX].iter().zip(&series(0, top.oriented_second_axis())).map(|(a, b)| a.min(*b)).collect(),
    };
    let trace = Trace {
        times_ps: times.to_vec(),
        cos2: align,
        cos2_2d: None,
        orientation: Some(Orientation { cos: values[COS_Z_INDEX].clone(), cos3: None }),
        body_axes: Some(body_axes),
        lab_axes,
        lab_cos,
    };
    // Time averages in a tilted static field would need the dressed states of every class: not computed.
    let final_sums = LevelSums::new(vec![], f64::INFINITY, false);
    RunResult {
        trace,
        permanent_cos2: f64::NAN,
        permanent_cos2_2d: 0.0,
        blocks: reports,
        events,
        final_sums: crate::observe::FreeSums::Levels(final_sums),
        permanent_cos: None,
    }
}

fn try_chunk(ops: &TiltedTopOps, cols: &[Column], run: &TiltedTopRun, events: &[Event], times: &[f64], t_first: f64) -> Option<ChunkOutcome> {
    let pops: Vec<f64> = cols.iter().map(|c| c.population).collect();
    let coefficients: Vec<Vec<(Prim, f64)>> = cols.iter().map(|c| c.coefficients.clone()).collect();
    let start = ops.eigen_columns(&coefficients);
    let state = BlockState::from_columns(&start, t_first);
    let kernel = TiltedTopKernel { ops, run, pops, combined: std::cell::RefCell::new(ops.parts[IDENTITY].clone()) };
    let (values, edge) = sampled_walk(&kernel, state, events, times, run.settings.edge_tolerance)?;
    Some(ChunkOutcome { values, class: ops.class, j_max: ops.j_max, size: ops.size(), edge })
}

/// Walk `state` along `events` with `kernel` and fill every sample (those between events from the
/// state kept at the stretch's start); None when the basis edge filled.
fn sampled_walk<K: Kernel<Item = Event, Stretch = BlockState>>(
    kernel: &K,
    state: BlockState,
    events: &[Event],
    times: &[f64],
    tolerance: f64,
) -> Option<(Vec<Vec<f64>>, f64)> {
    let w = walk(kernel, state, events, times, tolerance)?;
    let mut values = w.values;
    if values.is_empty() {
        values = vec![vec![0.0; times.len()]; OBSERVABLES];
    }
    let mut scratch = vec![0.0; OBSERVABLES];
    let stretches = w.stretches.into_iter().map(|(r, _, s)| (r, s)).chain(std::iter::once((w.rest.clone(), w.state.clone())));
    for (range, from) in stretches {
        let mut st = from;
        for i in range {
            let dt = times[i] - st.t_ps;
            if dt != 0.0 {
                kernel.free(&mut st, 0, dt);
            }
            kernel.sample(&st, &mut scratch);
            for (o, x) in scratch.iter().enumerate() {
                values[o][i] = *x;
            }
        }
    }
    Some((values, w.edge))
}

/// True when the run steps in the instantaneous frame: as `solver.frame_steps` says, else when every
/// pulse of `field` is slow (a static field alone included).
fn in_frame(field: &FieldModel, settings: &SolverSettings) -> bool {
    if let Some(on) = settings.frame_steps {
        return on;
    }
    field.pulses.iter().filter(|p| p.peak_intensity_wcm2 > 0.0).all(|p| p.time_scale_ps() >= FRAME_MIN_TIME_SCALE_PS)
}

/// The classes of a run with slow pulses, each propagated whole in the instantaneous frame below an
/// energy cut that grows until the start states and the run stay inside it.
#[allow(clippy::too_many_arguments)]
fn run_classes_in_frame(
    top: &Top,
    frame: &TopFrame,
    cache: &TiltedTopCache,
    run: &TiltedTopRun,
    classes: &[(Class, Vec<Column>)],
    events: &[Event],
    times: &[f64],
    t_first: f64,
    progress: &super::RunProgress,
) -> Result<Vec<ChunkOutcome>> {
    let field = run.field;
    let per_cm = cm_to_rad_per_ps(1.0);
    // How deep the fields dress the levels (cm⁻¹): the laser at every pulse's peak, the static field both ways.
    let all: Vec<usize> = (0..field.pulses.len()).collect();
    let laser_cm: f64 = field.pulses.iter().map(|p| laser_angles(field, &all, run.delta_alpha_a3, p.center_ps, 1.0).1).fold(0.0, f64::max) / per_cm;
    let static_cm = field.static_field.map(|s| dipole_rate_rad_per_ps(run.dipole_debye, s.strength_kv_cm).abs()).unwrap_or(0.0) / per_cm;
    let shortest = field.pulses.iter().filter(|p| p.peak_intensity_wcm2 > 0.0).map(|p| p.time_scale_ps()).fold(f64::INFINITY, f64::min);
    let frame_run = FrameRun { base: run, max_step_ps: (shortest / 8.0).min(1e6) };
    let level_cm = |j: i64| super::tilted_top_frame::levels_of_j(frame, j).min();
    let cap_cm = level_cm(MAX_TILTED_TOP_J).floor() as usize;
    let b_cm = top.c_cm.max(1e-6);
    progress.plan(classes.len());
    classes
        .par_iter()
        .map(|(class, cols)| {
            let j_start = cols.iter().map(|c| c.j_top).max().unwrap_or(0);
            // The dressed states' tails reach about three laser depths above the start levels (measured on
            // SO2: the cut the edge asks for at 0.1–1 K), so start there rather than grow through it.
            let first = (level_cm(j_start) + 3.0 * laser_cm + 2.0 * static_cm + 20.0 * b_cm).ceil() as usize;
            let pops: Vec<f64> = cols.iter().map(|c| c.population).collect();
            let coefficients: Vec<Vec<(Prim, f64)>> = cols.iter().map(|c| c.coefficients.clone()).collect();
            let r = grow_basis(
                first.max(1),
                cap_cm,
                |cut| {
                    let full = cache.get(top, frame, *class, frame_j_max(frame, cut as f64));
                    // Dense: six parts, eleven observables and a few work matrices of the kept states.
                    let kept = full.omega.iter().filter(|&&w| w < cut as f64 * per_cm).count();
                    crate::resources::check_memory(
                        (kept as f64).powi(2) * 8.0 * 24.0,
                        "temperature_k",
                        &format!("the slow-pulse basis of a top below {cut} cm⁻¹ ({kept} states a class)"),
                    )?;
                    let ops = FrameOps::new(&full, cut as f64);
                    let (start, lost) = ops.restrict(&full.eigen_columns(&coefficients));
                    let state = BlockState::from_columns(&start, t_first);
                    let kernel = FrameKernel::new(&ops, &frame_run, pops.clone());
                    // The start states must leave the edge (nearly) empty, as the J-cut bases do.
                    if lost > run.settings.edge_tolerance || kernel.edge(&state) > 1e-2 * run.settings.edge_tolerance {
                        return Ok(None);
                    }
                    Ok(sampled_walk(&kernel, state, events, times, run.settings.edge_tolerance)
                        .map(|(values, edge)| ChunkOutcome { values, class: *class, j_max: full.j_max, size: ops.size(), edge }))
                },
                || Error::Numerical(format!("tilted static field on a top under slow pulses: the basis would need levels above {cap_cm} cm⁻¹; lower the field strengths or the temperature")),
            );
            progress.finish_one();
            r
        })
        .collect()
}

/// The top J of the function basis that holds every level below `cut_cm`.
fn frame_j_max(frame: &TopFrame, cut_cm: f64) -> i64 {
    super::tilted_top_frame::j_above(frame, cut_cm).max(1)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::molecule::Molecule;

    #[test]
    fn classes_are_closed_under_every_coupling_and_elements_match_primitive_ones() {
        // Reference: LabOperator elements between primitive |J K M⟩ (checked against Euler-angle
        // quadrature in basis::lab), expanded over the σ' combinations by hand; an element between
        // the two σ' classes of a coupling must vanish (the symmetry is exact).
        let mol = Molecule::from_library("SO2", "molecule").unwrap();
        let top = mol.as_top().unwrap();
        let frame = TopFrame::new(top, true);
        let j_max = 4;
        let ops_of = |sigma: i64| TiltedTopOps::new(top, &frame, Class { kset: KSet::Parity(1), sigma }, j_max);
        let (plus, minus) = (ops_of(1), ops_of(-1));
        let operators = [
            LabOperator::direction_cosine(LabAxis::Z, 0),
            LabOperator::direction_cosine(LabAxis::X, 0),
            square(LabAxis::X, LabAxis::Z, 1),
            square(LabAxis::Z, LabAxis::X, 2),
            square(LabAxis::Y, LabAxis::Y, 1),
        ];
        let el = |class: Class, fa: Prim, fb: Prim, op: &LabOperator| -> num_complex::Complex64 {
            let (a, na) = class.components(fa);
            let (b, nb) = class.components(fb);
            let mut v = num_complex::Complex64::new(0.0, 0.0);
            for &(pa, ca) in &a[..na] {
                for &(pb, cb) in &b[..nb] {
                    v += op.element(pa, pb) * (ca * cb);
                }
            }
            v
        };
        for op in &operators {
            let dense = Csr::from_triplets(plus.size(), plus.triplets(op)).to_dense();
            for (a, &fa) in plus.functions.iter().enumerate() {
                for (b, &fb) in plus.functions.iter().enumerate() {
                    let want = el(plus.class, fa, fb, op);
                    assert!((dense[(a, b)] - want.re).abs() < 1e-13 && want.im.abs() < 1e-13, "{fa:?} {fb:?}");
                }
                for &fb in &minus.functions {
                    // ⟨+|O|−⟩ with the + bra and the − ket.
                    let (ca, na) = plus.class.components(fa);
                    let (cb, nb) = minus.class.components(fb);
                    let mut v = num_complex::Complex64::new(0.0, 0.0);
                    for &(pa, x) in &ca[..na] {
                        for &(pb, y) in &cb[..nb] {
                            v += op.element(pa, pb) * (x * y);
                        }
                    }
                    assert!(v.norm() < 1e-13, "σ' mixes {fa:?} and {fb:?}: {v}");
                }
            }
        }
    }

    #[test]
    fn field_free_energies_match_the_top_levels() {
        // The (J, M) groups of a class hold the asymmetric-top levels of J (eigenvalues of the K block of
        // H0 of the frame); each level's (2J + 1) sublevels are spread over the classes and M groups.
        let mol = Molecule::from_library("SO2", "molecule").unwrap();
        let top = mol.as_top().unwrap();
        let frame = TopFrame::new(top, true);
        let j = 3;
        let mut all: Vec<f64> = vec![];
        for p in [0, 1] {
            for sigma in [1, -1] {
                let ops = TiltedTopOps::new(top, &frame, Class { kset: KSet::Parity(p), sigma }, j);
                all.extend(ops.functions.iter().zip(&ops.omega).filter(|(f, _)| f.0 == j).map(|(_, w)| *w));
            }
        }
        assert_eq!(all.len(), ((2 * j + 1) * (2 * j + 1)) as usize);
        let h = DMatrix::from_fn((2 * j + 1) as usize, (2 * j + 1) as usize, |r, c| frame.h0(j, r as i64 - j, c as i64 - j));
        let (levels, _) = sorted_eigen(h);
        all.sort_by(f64::total_cmp);
        for (i, w) in all.iter().enumerate() {
            let e = cm_to_rad_per_ps(levels[i / (2 * j + 1) as usize]);
            assert!((w - e).abs() < 1e-9 * e.abs().max(1.0), "{i}: {w} vs {e}");
        }
    }

    #[test]
    fn the_rotation_about_x_is_a_symmetry_of_a_laser_along_z_and_a_static_field_along_x() {
        // Exact: C₂(X) = e^{−iπJ_X} squares to one, leaves Φ_Z² and Φ_X (and H0) unchanged and reverses Φ_Z,
        // so it commutes with the laser along Z and the dipole along X and anticommutes with the dipole
        // along Z. Its phase (−1)^J is checked here; a wrong one fails every commutator. Both σ' classes of
        // SO2 (dipole along b), J ≤ 5.
        let mol = Molecule::from_library("SO2", "molecule").unwrap();
        let top = mol.as_top().unwrap();
        let frame = TopFrame::new(top, true);
        for (kset, sigma) in [(KSet::Parity(0), 1), (KSet::Parity(1), -1), (KSet::Parity(0), -1)] {
            let ops = TiltedTopOps::new(top, &frame, Class { kset, sigma }, 5);
            let c = ops.rotation_x_pi().to_dense();
            let n = ops.size();
            assert!((&c * &c - DMatrix::<f64>::identity(n, n)).amax() < 1e-14);
            // H0 in the functions: each (J, M) group's eigenvectors and levels.
            let mut h0 = DMatrix::<f64>::zeros(n, n);
            for &(s0, len, v) in &ops.groups {
                let vecs = &ops.vectors[v];
                let block = vecs * DMatrix::from_diagonal(&nalgebra::DVector::from_column_slice(&ops.omega[s0..s0 + len])) * vecs.transpose();
                h0.view_mut((s0, s0), (len, len)).copy_from(&block);
            }
            let commutator = |a: &DMatrix<f64>, sign: f64| (&c * a - a * &c * sign).amax();
            for (name, a, sign) in [
                ("H0", h0.clone(), 1.0),
                ("ZZ", ops.parts[ZZ].to_dense(), 1.0),
                ("dipole X", ops.parts[DIP_X].to_dense(), 1.0),
                ("dipole Z", ops.parts[DIP_Z].to_dense(), -1.0),
            ] {
                assert!(a.amax() > 0.1, "{name} must not vanish for the check to mean something");
                assert!(commutator(&a, sign) < 1e-12, "{kset:?} σ' {sigma}: {name} {}", commutator(&a, sign));
            }
            // Φ_X² is unchanged too; Φ_X Φ_Z + Φ_Z Φ_X changes sign.
            assert!(commutator(&ops.parts[XZ].to_dense(), -1.0) < 1e-12);
            assert!(commutator(&ops.parts[XX].to_dense(), 1.0) < 1e-12);
        }
    }
}
