//! The all-M solver for laser fields that are not symmetric about Z (three-dimensional alignment):
//! elliptically polarized pulses and pulses polarized at an angle in the XZ plane, for linear
//! molecules, symmetric tops and asymmetric tops.
//!
//! Symmetries kept (each exact; the tests check that no coupling crosses them):
//! - the body symmetry of the rotor (Wang class of an asymmetric top, K of a symmetric top, parity of J
//!   of a linear molecule): couplings and observables are squares of direction cosines of principal axes;
//! - the two-fold rotation about the propagation axis Y, C₂(Y)|J K M⟩ ∝ (−1)^(J+M)|J K −M⟩, under which
//!   every field ellipse in the XZ plane is invariant: blocks are spanned by the combinations
//!   (|M⟩ + s(−1)^(J+M)|−M⟩)/√2 with s = ±1 (M = 0 alone belongs to s = (−1)^J);
//! - when every pulse has its axes along Z and X (angles multiples of 90°), the rotation by π about Z
//!   as well: M then changes in steps of two and its parity splits each block again.
//!
//! States live in the field-free eigenbasis |J τ μ⟩ (τ the level within J, μ the M combination), so free
//! evolution is phases. Every operator is a sum over ranks r of a lab factor (on the M combinations)
//! times a body factor (on the K functions) — the Clebsch–Gordan series of `basis::lab` — which is
//! assembled into the sparse coupling for Chebyshev kicks, and, after the pulses, contracted with the
//! states into coherence sums over pairs of field-free levels (M-degenerate sublevels summed exactly).

mod detector;

use super::driver::{ALL_M_STEP, Kernel, Run, SampleCursor, grow_basis, walk};
use super::{BlockReport, Event};
use crate::basis::BlockSymmetry;
use crate::basis::detector::{DetectorAxis, DetectorTable};
use crate::basis::lab::{LabAxis, Polarization, body_square, lab_pair};
use crate::basis::top::{BasisFunction, TopBlock, TopBlockBasis, TopFrame, TopSym};
use crate::basis::wigner::three_j;
use crate::error::{Error, Result};
use crate::field::{FieldModel, PulsePolarization};
use crate::molecule::top::BodyAxis;
use crate::numeric::{Strided, gemm_strided};
use crate::observe::pairs::PairSums;
use crate::propagate::sparse::{Csr, chebyshev_kick_transposed, with_scratch};
use crate::propagate::{BlockState, FreePhases};
use crate::scenario::SolverSettings;
use crate::units::{cm_to_rad_per_ps, coupling_rad_per_ps_per_a3_wcm2};
use detector::{DetectorCoefficients, DetectorOps};
use nalgebra::DMatrix;
use num_complex::Complex64;
use rayon::prelude::*;
use std::collections::HashMap;
use std::sync::{Arc, Mutex, OnceLock};

/// Lab axes in the order of the observables: X, Y, Z.
pub const LAB_AXES: [LabAxis; 3] = [LabAxis::X, LabAxis::Y, LabAxis::Z];

/// Largest J the all-M basis may reach; beyond it the run is refused, not truncated.
pub const MAX_LAB_BASIS_J: i64 = 160;

/// Couplings of distinct polarizations kept per block.
const POLARIZATION_CACHE: usize = 4;

/// Initial states propagated together in one chunk (one basis, one set of products per kick).
const CHUNK: usize = 32;

/// Lab-frame tensor pieces: rank 0; rank 2 with P = 0; P = ±1 as D₁ − D₋₁; P = ±2 as D₂ + D₋₂.
const KINDS: usize = 4;

/// Rank of a lab piece.
fn kind_rank(kind: usize) -> i64 {
    if kind == 0 { 0 } else { 2 }
}

/// (P, sign) of the components of a lab piece.
fn kind_components(kind: usize) -> &'static [(i64, f64)] {
    match kind {
        0 | 1 => &[(0, 1.0)],
        2 => &[(1, 1.0), (-1, -1.0)],
        _ => &[(2, 1.0), (-2, 1.0)],
    }
}

/// Weights of the lab pieces in a lab factor [r][P + 2] of a field or observable in the XZ plane or
/// along Y (real, P = ±1 antisymmetric, P = ±2 symmetric, no rank 1: checked in the tests).
fn kind_weights(lab: &[[Complex64; 5]; 3]) -> [f64; KINDS] {
    [lab[0][2].re, lab[2][2].re, lab[2][3].re, lab[2][4].re]
}

/// One symmetry class of the rotor's levels with its thermal populations.
#[derive(Debug, Clone)]
pub struct LevelClass {
    /// Body symmetry (Wang class, K, or K = 0 for linear molecules).
    pub sym: TopSym,
    /// Parity of J kept (linear molecules), or all J.
    pub j_parity: Option<i64>,
    /// How many identical classes this one stands for (2 for ±K of a symmetric top).
    pub weight: f64,
    /// (J, index of the level within J, population of one M sublevel), J ascending.
    pub levels: Vec<(i64, usize, f64)>,
}

/// What the all-M solver needs of a molecule.
#[derive(Debug, Clone)]
pub struct LabRotor {
    /// Quantization frame (K along its z axis).
    pub frame: TopFrame,
    /// (α_g − α_min)/Δα for the frame axes z, x, y.
    pub alpha_weights: [f64; 3],
    /// Polarizability anisotropy Δα = α_max − α_min, Å³.
    pub delta_alpha_a3: f64,
    /// True for a linear molecule (only the molecular axis, frame z, is reported).
    pub linear: bool,
    /// Level classes with their thermal populations.
    pub classes: Vec<LevelClass>,
    /// The axis whose detector-plane alignment ⟨cos²θ_2D⟩ is reported (None: not available).
    pub detector_axis: Option<DetectorAxis>,
}

impl LabRotor {
    /// A top from its M-conserving solver (same frame, same thermal levels).
    pub fn from_top(t: &super::top::TopSolver) -> LabRotor {
        let axes = t.frame.axes;
        let p = t.top.polarizability_a3;
        let lo = p.iter().cloned().fold(f64::MAX, f64::min);
        let da = t.top.delta_alpha_a3();
        let w = |i: usize| if da > 0.0 { (p[axes[i].index()] - lo) / da } else { 0.0 };
        let classes = t
            .ensemble
            .blocks
            .iter()
            .filter(|b| b.m == 0)
            .map(|b| LevelClass { sym: b.sym, j_parity: None, weight: b.weight, levels: b.levels.clone() })
            .collect();
        // The alignment axis along the K axis, or (symmetric tops, K conserved) perpendicular to it.
        let detector_axis = match t.frame.position(t.top.alignment_axis) {
            0 => Some(DetectorAxis::FrameZ),
            _ if t.frame.symmetric => Some(DetectorAxis::Perpendicular),
            _ => None,
        };
        LabRotor { frame: t.frame.clone(), alpha_weights: [w(0), w(1), w(2)], delta_alpha_a3: da, linear: false, classes, detector_axis }
    }

    /// A linear molecule: K = 0 only, the molecular axis as frame z, parity of J as the body symmetry.
    pub fn from_linear(mol: &crate::molecule::LinearRotor, ensemble: &crate::ensemble::ThermalEnsemble) -> LabRotor {
        let frame = TopFrame {
            axes: [BodyAxis::A, BodyAxis::B, BodyAxis::C],
            az: mol.b_cm,
            bx: mol.b_cm,
            by: mol.b_cm,
            distortion: [mol.d_cm, 0.0, 0.0],
            symmetric: true,
        };
        let (par, perp) = (mol.alpha_parallel_a3, mol.alpha_perpendicular_a3);
        let (lo, da) = (par.min(perp), (par - perp).abs());
        let w = |a: f64| if da > 0.0 { (a - lo) / da } else { 0.0 };
        let classes = ensemble
            .blocks
            .iter()
            .filter(|b| b.m == 0)
            .map(|b| LevelClass {
                sym: TopSym::K(0),
                j_parity: Some(b.parity as i64),
                weight: 1.0,
                levels: b.levels.iter().map(|&(j, p)| (j as i64, 0, p)).collect(),
            })
            .collect();
        LabRotor { frame, alpha_weights: [w(par), w(perp), w(perp)], delta_alpha_a3: da, linear: true, classes, detector_axis: Some(DetectorAxis::FrameZ) }
    }
}

/// One all-M block: a level class, the C₂(Y) label s = ±1, the parity of M when it is conserved, and the
/// highest J kept.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
struct LabBlock {
    class: usize,
    s: i64,
    m_parity: Option<i64>,
    j_max: i64,
}

/// The states of one J in a block: K functions (or levels) × M combinations, M-major.
#[derive(Debug, Clone)]
struct Slice {
    j: i64,
    /// First state.
    start: usize,
    /// Number of K functions (= levels) at this J.
    nk: usize,
    /// M ≥ 0 of each combination.
    mus: Vec<i64>,
    /// Index of this J in the class basis (functions, eigenvectors, energies).
    range: usize,
}

/// The M combination of M ≥ 0 at J in block s: components (M, coefficient).
fn combo(j: i64, m: i64, s: i64) -> ([(i64, f64); 2], usize) {
    if m == 0 {
        ([(0, 1.0), (0, 0.0)], 1)
    } else {
        let h = std::f64::consts::FRAC_1_SQRT_2;
        let ph = if (j + m) % 2 == 0 { 1.0 } else { -1.0 };
        ([(m, h), (-m, s as f64 * ph * h)], 2)
    }
}

/// The M ≥ 0 of the combinations at J in block s (with the parity of M, if conserved).
fn block_mus(j: i64, s: i64, m_parity: Option<i64>) -> Vec<i64> {
    let zero_sign = if j % 2 == 0 { 1 } else { -1 };
    (0..=j).filter(|&m| m > 0 || s == zero_sign).filter(|&m| m_parity.is_none_or(|p| m % 2 == p)).collect()
}

/// Lab factor between M combinations μ' (at J') and μ (at J) of block s, for a lab piece:
/// sqrt((2J+1)(2J'+1)) Σ_P sign (−1)^(P+M) (J' r J; M' −P −M) over the components.
fn lab_element(jp: i64, mp: i64, j: i64, m: i64, s: i64, kind: usize) -> f64 {
    let r = kind_rank(kind);
    let n = (((2 * j + 1) * (2 * jp + 1)) as f64).sqrt();
    let (cp, np) = combo(jp, mp, s);
    let (c, nc) = combo(j, m, s);
    let mut v = 0.0;
    for &(mm_p, a) in &cp[..np] {
        for &(mm, b) in &c[..nc] {
            for &(p, sign) in kind_components(kind) {
                if mm_p != mm + p {
                    continue;
                }
                let ph = if (p + mm).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
                v += a * b * sign * ph * n * three_j(jp, r, j, mm_p, -p, -mm);
            }
        }
    }
    v
}

/// Body factor between K functions f' and f for rank r with coefficients d[Q + 2]:
/// Σ_Q d_Q (−1)^(Q+K) (J' r J; K' −Q −K) over the components.
fn body_element(fp: &BasisFunction, f: &BasisFunction, r: i64, d: &[f64; 5]) -> f64 {
    let (cp, np) = fp.components();
    let (c, nc) = f.components();
    let mut v = 0.0;
    for &(kp, a) in &cp[..np] {
        for &(k, b) in &c[..nc] {
            let q = kp - k;
            if q.abs() > 2 || d[(q + 2) as usize] == 0.0 {
                continue;
            }
            let ph = if (q + k).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
            v += a * b * d[(q + 2) as usize] * ph * three_j(fp.j, r, f.j, kp, -q, -k);
        }
    }
    v
}

/// A sparse matrix with several value sets on one pattern (the coupling's three polarization components,
/// or the nine direction-cosine observables).
#[derive(Debug)]
struct MultiCsr {
    n: usize,
    row_ptr: Vec<usize>,
    col: Vec<usize>,
    /// Values, element-major: vals[e * parts + p].
    vals: Vec<f64>,
    parts: usize,
}

impl MultiCsr {
    /// From (row, column, part, value) entries (duplicates summed).
    fn new(n: usize, parts: usize, mut t: Vec<(usize, usize, usize, f64)>) -> MultiCsr {
        t.sort_unstable_by_key(|x| (x.0, x.1));
        let mut row_ptr = vec![0; n + 1];
        let mut col = vec![];
        let mut vals: Vec<f64> = vec![];
        let mut last = None;
        for (r, c, p, v) in t {
            if last != Some((r, c)) {
                col.push(c);
                vals.extend(std::iter::repeat_n(0.0, parts));
                row_ptr[r + 1] += 1;
                last = Some((r, c));
            }
            let e = col.len() - 1;
            vals[e * parts + p] += v;
        }
        for r in 0..n {
            row_ptr[r + 1] += row_ptr[r];
        }
        MultiCsr { n, row_ptr, col, vals, parts }
    }

    /// Σ_p w_p (part p) as one sparse matrix.
    fn combine(&self, w: &[f64]) -> Csr {
        let val = (0..self.col.len()).map(|e| (0..self.parts).map(|p| w[p] * self.vals[e * self.parts + p]).sum()).collect();
        Csr::from_parts(self.n, self.row_ptr.clone(), self.col.clone(), val)
    }

    /// Bytes held.
    fn bytes(&self) -> usize {
        8 * (self.row_ptr.len() + self.col.len() + self.vals.len())
    }
}

/// Operators of one (J, J + d) pair of slices, d = 0, 1, 2.
#[derive(Debug)]
struct PairOps {
    a: usize,
    b: usize,
    /// Lab entries (μ' in b, μ in a, value) per lab piece.
    lab: [Vec<(usize, usize, f64)>; KINDS],
    /// Body factors between K functions, [rank 0, rank 2][frame position], nk_b × nk_a.
    body: [[DMatrix<f64>; 3]; 2],
    /// The same between field-free levels: V_bᵀ body V_a.
    body_levels: [[DMatrix<f64>; 3]; 2],
}

/// Operators of one all-M block.
#[derive(Debug)]
pub struct LabOps {
    block: LabBlock,
    basis: TopBlockBasis,
    slices: Vec<Slice>,
    size: usize,
    /// Field-free angular frequencies of the states, rad/ps.
    omega: Vec<f64>,
    pairs: Vec<PairOps>,
    /// Coupling parts (ZZ, XX, XZ + ZX lab factors with the polarizability body factor).
    coupling: MultiCsr,
    /// Nine observables Φ_Fg² (F = X, Y, Z; g = frame position), built when first needed.
    observables: OnceLock<MultiCsr>,
    /// Change to Y quantization and |K| matches for ⟨cos²θ_2D⟩, built when first needed.
    detector: OnceLock<DetectorOps>,
    /// Coupling per polarization, cached.
    by_polarization: Mutex<HashMap<(u64, u64), Arc<Csr>>>,
    /// Largest angular frequency of a transition the coupling drives, rad/ps.
    fastest: f64,
}

impl LabOps {
    fn new(rotor: &LabRotor, block: LabBlock) -> LabOps {
        let class = &rotor.classes[block.class];
        let basis = TopBlockBasis::new(&rotor.frame, TopBlock { m: 0, sym: class.sym, j_max: block.j_max });
        let mut slices = vec![];
        let mut size = 0;
        for (range, &(j, _, nk)) in basis.j_ranges.iter().enumerate() {
            if class.j_parity.is_some_and(|p| j % 2 != p) {
                continue;
            }
            let mus = block_mus(j, block.s, block.m_parity);
            if mus.is_empty() {
                continue;
            }
            slices.push(Slice { j, start: size, nk, mus: mus.clone(), range });
            size += nk * mus.len();
        }
        let mut omega = vec![0.0; size];
        for sl in &slices {
            let (_, fs, nk) = basis.j_ranges[sl.range];
            for mu in 0..sl.mus.len() {
                for i in 0..nk {
                    omega[sl.start + mu * nk + i] = cm_to_rad_per_ps(basis.energies_cm[fs + i]);
                }
            }
        }
        let bodies: Vec<[[f64; 5]; 3]> = (0..3).map(|g| body_square(g).map(|row| row.map(|c| c.re))).collect();
        let mut pairs = vec![];
        for (a, sa) in slices.iter().enumerate() {
            for (b, sb) in slices.iter().enumerate().skip(a) {
                let d = sb.j - sa.j;
                if d > 2 {
                    break;
                }
                let mut lab: [Vec<(usize, usize, f64)>; KINDS] = Default::default();
                for (kind, entries) in lab.iter_mut().enumerate() {
                    if d > kind_rank(kind) {
                        continue;
                    }
                    for (x, &m) in sa.mus.iter().enumerate() {
                        for (y, &mp) in sb.mus.iter().enumerate() {
                            if (mp - m).abs() > 2 && (mp + m).abs() > 2 {
                                continue;
                            }
                            let v = lab_element(sb.j, mp, sa.j, m, block.s, kind);
                            if v.abs() > 1e-15 {
                                entries.push((y, x, v));
                            }
                        }
                    }
                }
                let (_, fa, _) = basis.j_ranges[sa.range];
                let (_, fb, _) = basis.j_ranges[sb.range];
                let body: [[DMatrix<f64>; 3]; 2] = [0i64, 2].map(|r| {
                    [0, 1, 2].map(|g| {
                        DMatrix::from_fn(sb.nk, sa.nk, |y, x| {
                            if d > r {
                                return 0.0;
                            }
                            body_element(&basis.functions[fb + y], &basis.functions[fa + x], r, &bodies[g][r as usize])
                        })
                    })
                });
                let (va, vb) = (&basis.vectors[sa.range], &basis.vectors[sb.range]);
                let body_levels = [0, 1].map(|r| [0, 1, 2].map(|g| vb.transpose() * &body[r][g] * va));
                pairs.push(PairOps { a, b, lab, body, body_levels });
            }
        }
        let mut ops = LabOps {
            block,
            basis,
            slices,
            size,
            omega,
            pairs,
            coupling: MultiCsr::new(0, 1, vec![]),
            observables: OnceLock::new(),
            detector: OnceLock::new(),
            by_polarization: Mutex::new(HashMap::new()),
            fastest: 0.0,
        };
        let alpha = rotor.alpha_weights;
        let body_coupling = |p: &PairOps, r: usize| -> DMatrix<f64> {
            (0..3).map(|g| &p.body[r][g] * alpha[g]).fold(DMatrix::zeros(p.body[r][0].nrows(), p.body[r][0].ncols()), |acc, m| acc + m)
        };
        let parts = [kind_weights(&lab_pair(LabAxis::Z, LabAxis::Z)), kind_weights(&lab_pair(LabAxis::X, LabAxis::X)), {
            let (xz, zx) = (lab_pair(LabAxis::X, LabAxis::Z), lab_pair(LabAxis::Z, LabAxis::X));
            let mut s = [[Complex64::new(0.0, 0.0); 5]; 3];
            for r in 0..3 {
                for q in 0..5 {
                    s[r][q] = xz[r][q] + zx[r][q];
                }
            }
            kind_weights(&s)
        }];
        let mut t = vec![];
        for (part, lam) in parts.iter().enumerate() {
            ops.triplets(lam, |p, r| body_coupling(p, r), part, &mut t);
        }
        ops.coupling = MultiCsr::new(size, 3, t);
        // Fastest driven transition: level pairs with a coupling body element above 1e-3.
        let mut fastest: f64 = 0.0;
        for p in &ops.pairs {
            let (sa, sb) = (&ops.slices[p.a], &ops.slices[p.b]);
            let lv: DMatrix<f64> = (0..3).map(|g| &p.body_levels[1][g] * alpha[g]).fold(DMatrix::zeros(sb.nk, sa.nk), |acc, m| acc + m);
            for x in 0..sa.nk {
                for y in 0..sb.nk {
                    if lv[(y, x)].abs() > 1e-3 {
                        fastest = fastest.max((ops.omega[sb.start + y] - ops.omega[sa.start + x]).abs());
                    }
                }
            }
        }
        ops.fastest = fastest;
        ops
    }

    /// Append (row, column, part, value) of Σ_kinds λ lab ⊗ body(rank) over the block's states.
    fn triplets(&self, lam: &[f64; KINDS], body: impl Fn(&PairOps, usize) -> DMatrix<f64>, part: usize, out: &mut Vec<(usize, usize, usize, f64)>) {
        for p in &self.pairs {
            let (sa, sb) = (&self.slices[p.a], &self.slices[p.b]);
            let bodies = [body(p, 0), body(p, 1)];
            let nz: Vec<Vec<(usize, usize, f64)>> = bodies
                .iter()
                .map(|m| {
                    let mut v = vec![];
                    for x in 0..m.ncols() {
                        for y in 0..m.nrows() {
                            if m[(y, x)].abs() > 1e-15 {
                                v.push((y, x, m[(y, x)]));
                            }
                        }
                    }
                    v
                })
                .collect();
            for (kind, entries) in p.lab.iter().enumerate() {
                if lam[kind] == 0.0 {
                    continue;
                }
                let r = usize::from(kind_rank(kind) == 2);
                for &(y, x, lv) in entries {
                    for &(ky, kx, bv) in &nz[r] {
                        let row = sb.start + y * sb.nk + ky;
                        let col = sa.start + x * sa.nk + kx;
                        let v = lam[kind] * lv * bv;
                        out.push((row, col, part, v));
                        if p.a != p.b {
                            out.push((col, row, part, v));
                        }
                    }
                }
            }
        }
    }

    /// The nine observables Φ_Fg² (part 3F + g; F = X, Y, Z; g = frame position z, x, y).
    fn observables(&self) -> &MultiCsr {
        self.observables.get_or_init(|| {
            let mut t = vec![];
            for (f, axis) in LAB_AXES.iter().enumerate() {
                let lam = kind_weights(&lab_pair(*axis, *axis));
                for g in 0..3 {
                    self.triplets(&lam, |p, r| p.body[r][g].clone(), 3 * f + g, &mut t);
                }
            }
            MultiCsr::new(self.size, 9, t)
        })
    }

    /// What ⟨cos²θ_2D⟩ needs of this block.
    fn detector(&self) -> &DetectorOps {
        self.detector.get_or_init(|| DetectorOps::new(self))
    }

    /// The coupling of one polarization (spectrum in [0, 1]).
    fn coupling_for(&self, pol: &PulsePolarization) -> Arc<Csr> {
        let key = (pol.angle_deg.to_bits(), pol.ellipticity.to_bits());
        if let Some(c) = self.by_polarization.lock().expect("coupling cache").get(&key) {
            return c.clone();
        }
        let p = Polarization { angle_rad: pol.angle_deg.to_radians(), ellipticity: pol.ellipticity };
        let w = p.coupling_weights();
        let c = Arc::new(self.coupling.combine(&[w[0].2, w[1].2, w[2].2]));
        // A designer varies polarizations continuously: keep only a few, or memory grows without bound.
        let mut cache = self.by_polarization.lock().expect("coupling cache");
        if cache.len() >= POLARIZATION_CACHE {
            cache.clear();
        }
        cache.insert(key, c.clone());
        c
    }

    /// Approximate bytes held, counting what may be added later (the nine observables and the cached
    /// couplings of a few polarizations).
    fn bytes(&self) -> usize {
        let nnz = self.coupling.col.len();
        let later = 80 * nnz + POLARIZATION_CACHE * 16 * nnz;
        let pairs: usize = self.pairs.iter().map(|p| 16 * p.lab.iter().map(|l| l.len()).sum::<usize>() + 8 * 12 * p.body[0][0].len()).sum();
        let detector = self.detector.get().map(|d| d.bytes()).unwrap_or(0);
        pairs + self.coupling.bytes() + later + 8 * self.omega.len() + detector
    }

    /// States in the top two J values (the edge watched for truncation).
    fn edge_states(&self) -> usize {
        self.slices.iter().rev().take(2).map(|s| s.nk * s.mus.len()).sum()
    }

    /// Calls `each(Vᵀ, first state, length)` for every (J, M combination) range of states, with Vᵀ the
    /// transposed eigenvectors of that J (one basis change per range).
    fn for_each_range(&self, mut each: impl FnMut(Strided<'_>, usize, usize)) {
        for sl in &self.slices {
            let len = sl.nk;
            let v = &self.basis.vectors[sl.range];
            let vt = Strided { data: v.as_slice(), offset: 0, shape: (len, len), strides: (len, 1) };
            for mu in 0..sl.mus.len() {
                each(vt, sl.start + mu * len, len);
            }
        }
    }

    /// f = (V ψ)ᵀ: the function-basis states, transposed (row r of the states in f[r·cols..]).
    fn states_to_functions(&self, psi: &[f64], n: usize, cols: usize, f: &mut [f64]) {
        self.for_each_range(|vt, s, len| {
            let rows_t = Strided { data: psi, offset: s, shape: (cols, len), strides: (n, 1) };
            gemm_strided(rows_t, vt, f, s * cols, (1, cols));
        });
    }

    /// ψ = Vᵀ f for states given transposed in the function basis.
    fn functions_to_states(&self, f: &[f64], n: usize, cols: usize, psi: &mut [f64]) {
        self.for_each_range(|vt, s, len| {
            let rows = Strided { data: f, offset: s * cols, shape: (len, cols), strides: (cols, 1) };
            gemm_strided(vt, rows, psi, s, (1, n));
        });
    }

    /// Run `f` on a read-only evaluation of the states in the function basis, transposed (`f(states, cols)`,
    /// see `states_to_functions`).
    fn in_functions<R>(&self, state: &BlockState, f: impl FnOnce(&mut [f64], usize) -> R) -> R {
        let (n, cols) = state.psi.shape();
        with_scratch(n * cols, |buf| {
            self.states_to_functions(state.psi.as_slice(), n, cols, buf);
            f(buf, cols)
        })
    }

    /// ψ ← exp(iθA) ψ for the coupling A (eigenbasis in and out, through the function basis).
    fn kick(&self, state: &mut BlockState, theta: f64, a: &Csr) {
        if theta == 0.0 {
            return;
        }
        let (n, cols) = state.psi.shape();
        with_scratch(n * cols, |f| {
            self.states_to_functions(state.psi.as_slice(), n, cols, f);
            chebyshev_kick_transposed(a, theta, f, cols);
            self.functions_to_states(f, n, cols, state.psi.as_mut_slice());
        });
    }

    /// Σ_c p_c ⟨ψ_c|Φ_Fg²|ψ_c⟩ for the nine observables (part order) of k states given transposed in the
    /// function basis (`states_to_functions`).
    fn expect_in(&self, f: &[f64], cols: usize, k: usize, pops: &[f64]) -> [f64; 9] {
        let obs = self.observables();
        let mut out = [0.0; 9];
        let n = self.size;
        let w: Vec<f64> = (0..cols).map(|c| pops[c % k]).collect();
        let mut wr = vec![0.0; cols];
        for r in 0..n {
            let row = &f[r * cols..(r + 1) * cols];
            for ((x, y), z) in wr.iter_mut().zip(row).zip(&w) {
                *x = y * z;
            }
            for e in obs.row_ptr[r]..obs.row_ptr[r + 1] {
                let c = obs.col[e];
                let d: f64 = wr.iter().zip(&f[c * cols..(c + 1) * cols]).map(|(x, y)| x * y).sum();
                for (o, acc) in out.iter_mut().enumerate() {
                    *acc += obs.vals[e * 9 + o] * d;
                }
            }
        }
        out
    }

    /// One past the last row of `state` with any amplitude above 1e-13 (rows beyond hold nothing).
    fn live_rows(state: &BlockState) -> usize {
        let n = state.psi.nrows();
        (0..n).rev().find(|&r| (0..2 * state.k).any(|c| state.psi[(r, c)].powi(2) > 1e-26)).map(|r| r + 1).unwrap_or(0)
    }

    /// Coherence coefficients of the states for the nine observables, per pair of slices (J, J + d):
    /// C[o] = (Re, Im) of ρ_ab O_ba between level a (at J) and level b (at J + d), summed over the M
    /// combinations, as nk_b × nk_a matrices.
    fn coefficients(&self, state: &BlockState, pops: &[f64]) -> PairCoefficients {
        let k = state.k;
        let two_k = 2 * k;
        let live = Self::live_rows(state);
        let sq: Vec<f64> = pops.iter().map(|p| p.sqrt()).collect();
        let gathered: Vec<Option<DMatrix<f64>>> = self
            .slices
            .iter()
            .map(|sl| {
                (sl.start < live).then(|| {
                    DMatrix::from_fn(sl.nk, sl.mus.len() * two_k, |i, col| state.psi[(sl.start + (col / two_k) * sl.nk + i, col % two_k)] * sq[col % k])
                })
            })
            .collect();
        let lams: Vec<[f64; KINDS]> = LAB_AXES.iter().map(|&f| kind_weights(&lab_pair(f, f))).collect();
        let mut out = vec![];
        for p in &self.pairs {
            let (Some(pa), Some(pb)) = (&gathered[p.a], &gathered[p.b]) else { continue };
            let (sa, sb) = (&self.slices[p.a], &self.slices[p.b]);
            let mut g: Vec<Option<(DMatrix<f64>, DMatrix<f64>)>> = vec![None; KINDS];
            for kind in [0usize, 1, 3] {
                if p.lab[kind].is_empty() {
                    continue;
                }
                let mut z = DMatrix::zeros(sa.nk, sb.mus.len() * two_k);
                // Columns of one M combination are contiguous (column-major): add slices.
                let len = sa.nk * two_k;
                for &(y, x, v) in &p.lab[kind] {
                    let src = &pa.as_slice()[x * len..(x + 1) * len];
                    for (d, s) in z.as_mut_slice()[y * len..(y + 1) * len].iter_mut().zip(src) {
                        *d += v * s;
                    }
                }
                let mut zt = DMatrix::zeros(sa.nk, sb.mus.len() * two_k);
                for y in 0..sb.mus.len() {
                    zt.columns_mut(y * two_k, k).copy_from(&z.columns(y * two_k + k, k));
                    zt.columns_mut(y * two_k + k, k).copy_from(&(-z.columns(y * two_k, k)));
                }
                g[kind] = Some((pb * z.transpose(), pb * zt.transpose()));
            }
            let mut coeffs = vec![];
            for lam in &lams {
                for pos in 0..3 {
                    let mut re = DMatrix::zeros(sb.nk, sa.nk);
                    let mut im = DMatrix::zeros(sb.nk, sa.nk);
                    for kind in [0usize, 1, 3] {
                        let Some((gr, gi)) = &g[kind] else { continue };
                        let bl = &p.body_levels[usize::from(kind_rank(kind) == 2)][pos];
                        re += gr.component_mul(bl) * lam[kind];
                        im += gi.component_mul(bl) * lam[kind];
                    }
                    coeffs.push((re, im));
                }
            }
            out.push(((sa.j, sb.j - sa.j), coeffs));
        }
        out
    }
}

/// Coherence coefficients of one chunk: per (J, d) the nine observables' (Re, Im) matrices.
type PairCoefficients = Vec<((i64, i64), Vec<(DMatrix<f64>, DMatrix<f64>)>)>;

/// Level-pair coefficients of one level class, keyed by (J, d): nine (Re, Im) matrices each.
type ClassCoefficients = HashMap<(i64, i64), Vec<(DMatrix<f64>, DMatrix<f64>)>>;

/// Detector-plane coefficients of one level class, keyed by ordered (J_a, J_b): (Re, Im) of ρ_ab D_ba.
type ClassDetector = HashMap<(i64, i64), (DMatrix<f64>, DMatrix<f64>)>;

/// Coefficients of all classes, merged in a fixed order.
#[derive(Default)]
struct Coefficients {
    classes: HashMap<usize, ClassCoefficients>,
    /// Detector-plane coefficients per class and the weighted Σ ρ_aa, when ⟨cos²θ_2D⟩ is computed.
    detector: Option<(HashMap<usize, ClassDetector>, f64)>,
}

impl Coefficients {
    fn add(&mut self, class: usize, weight: f64, list: PairCoefficients, det: Option<DetectorCoefficients>) {
        if let Some(det) = det {
            let (by_class, norm) = self.detector.get_or_insert_with(Default::default);
            *norm += weight * det.norm;
            let acc = by_class.entry(class).or_default();
            for (key, (re, im)) in det.pairs {
                match acc.get_mut(&key) {
                    Some((hr, hi)) => {
                        *hr += re * weight;
                        *hi += im * weight;
                    }
                    None => {
                        acc.insert(key, (re * weight, im * weight));
                    }
                }
            }
        }
        let acc = self.classes.entry(class).or_default();
        for (key, mats) in list {
            match acc.get_mut(&key) {
                Some(held) => {
                    for ((hr, hi), (r, i)) in held.iter_mut().zip(mats) {
                        *hr += r * weight;
                        *hi += i * weight;
                    }
                }
                None => {
                    acc.insert(key, mats.into_iter().map(|(r, i)| (r * weight, i * weight)).collect());
                }
            }
        }
    }

    /// The coherence sums at time `t0_ps` (nine observables, and ⟨cos²θ_2D⟩ as the tenth when computed);
    /// `energies(class, j)` gives the levels' cm⁻¹.
    fn into_sums(self, t0_ps: f64, energies: &dyn Fn(usize, i64) -> Vec<f64>) -> PairSums {
        let mut sums = PairSums::new(if self.detector.is_some() { 10 } else { 9 }, t0_ps);
        let mut ids: HashMap<(usize, i64, usize), u32> = HashMap::new();
        if let Some((by_class, norm)) = self.detector {
            // cos²θ_2D = ½ + ¼(D + D†): ρ_aa O_aa = ½ρ_aa + ½ Re X_aa, and C_ab = ¼(X_ab + conj X_ba), X_ab = ρ_ab D_ba.
            sums.add_diagonal(9, 0.5 * norm);
            let mut classes: Vec<_> = by_class.into_iter().collect();
            classes.sort_by_key(|c| c.0);
            for (class, acc) in classes {
                let mut keys: Vec<_> = acc.keys().copied().collect();
                keys.sort_unstable();
                for (ja, jb) in keys {
                    let (re, im) = &acc[&(ja, jb)];
                    let (ea, eb) = (energies(class, ja), energies(class, jb));
                    for x in 0..re.ncols() {
                        for y in 0..re.nrows() {
                            let c = (re[(y, x)], im[(y, x)]);
                            if ja == jb && x == y {
                                sums.add_diagonal(9, 0.5 * c.0);
                            } else if c.0.abs() + c.1.abs() > 1e-16 {
                                let next = ids.len() as u32;
                                let la = *ids.entry((class, ja, x)).or_insert(next);
                                let next = ids.len() as u32;
                                let lb = *ids.entry((class, jb, y)).or_insert(next);
                                sums.add_level_pair(9, (la, cm_to_rad_per_ps(ea[x])), (lb, cm_to_rad_per_ps(eb[y])), (0.25 * c.0, 0.25 * c.1));
                            }
                        }
                    }
                }
            }
        }
        let mut classes: Vec<_> = self.classes.into_iter().collect();
        classes.sort_by_key(|c| c.0);
        for (class, acc) in classes {
            let mut keys: Vec<_> = acc.keys().copied().collect();
            keys.sort_unstable();
            for (j, d) in keys {
                let mats = &acc[&(j, d)];
                let (ea, eb) = (energies(class, j), energies(class, j + d));
                let mut id = |jj: i64, i: usize| {
                    let next = ids.len() as u32;
                    *ids.entry((class, jj, i)).or_insert(next)
                };
                let na = mats[0].0.ncols();
                let nb = mats[0].0.nrows();
                let la: Vec<(u32, f64)> = (0..na).map(|x| (id(j, x), cm_to_rad_per_ps(ea[x]))).collect();
                let lb: Vec<(u32, f64)> = (0..nb).map(|y| (id(j + d, y), cm_to_rad_per_ps(eb[y]))).collect();
                for (o, (re, im)) in mats.iter().enumerate() {
                    for x in 0..na {
                        for y in 0..nb {
                            if d == 0 && y < x {
                                continue;
                            }
                            let c = (re[(y, x)], im[(y, x)]);
                            if d == 0 && y == x {
                                sums.add_diagonal(o, c.0);
                            } else if c.0.abs() + c.1.abs() > 1e-16 {
                                sums.add_level_pair(o, la[x], lb[y], c);
                            }
                        }
                    }
                }
            }
        }
        sums
    }
}

/// Result of an all-M run: the nine direction-cosine averages at the sample times and the coherence
/// sums after the last pulse.
#[derive(Debug, Clone)]
pub struct LabRun {
    /// ⟨Φ_Fg²⟩(t): [lab axis X, Y, Z][frame position z, x, y] per sample time.
    pub values: [[Vec<f64>; 3]; 3],
    /// ⟨cos²θ_2D⟩ of the alignment axis per sample time (None when not computed).
    pub cos2_2d: Option<Vec<f64>>,
    /// Coherence sums after the last event (parts 3F + frame position; part 9 ⟨cos²θ_2D⟩ when computed).
    pub final_sums: PairSums,
    /// One report per block (largest basis and edge population over its chunks).
    pub blocks: Vec<BlockReport>,
}

/// Where the time of the last all-M run went.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct LabTiming {
    /// Thread-seconds in kicks and free evolution.
    pub propagate_cpu_s: f64,
    /// Thread-seconds in observables: in-pulse samples and the coherence coefficients of the states.
    pub observe_cpu_s: f64,
    /// Wall seconds merging the coherence sums and evaluating them at the sample times.
    pub sums_s: f64,
    /// Wall seconds of the whole run.
    pub total_s: f64,
    /// Chunks that started again in a larger basis, and the thread-seconds their first attempts cost.
    pub retries: usize,
    /// Thread-seconds spent in attempts that were started again.
    pub retry_cpu_s: f64,
}

/// What one chunk of initial states returns.
struct ChunkOutcome {
    propagate_s: f64,
    /// Attempts started again in a larger basis, and their thread-seconds.
    retries: usize,
    retry_s: f64,
    observe_s: f64,
    class: usize,
    weight: f64,
    values: Vec<[f64; 10]>,
    gaps: Vec<(PairCoefficients, Option<DetectorCoefficients>)>,
    final_coeffs: (PairCoefficients, Option<DetectorCoefficients>),
    block: LabBlock,
    j_max: i64,
    size: usize,
    edge: f64,
}

/// An all-M chunk of one level class: the initial states of one (class, C2 sign, M parity) block in
/// pulses of any polarization (the nine direction-cosine averages and, when asked, ⟨cos²θ_2D⟩).
struct LabKernel<'a> {
    ops: &'a LabOps,
    /// Populations of the chunk's initial states.
    pops: Vec<f64>,
    /// Weight of the level class (spin statistics).
    g: f64,
    /// θ table of the detector-plane operator (None: no ⟨cos²θ_2D⟩).
    table: Option<&'a DetectorTable>,
    field: &'a FieldModel,
    /// Polarizability anisotropy, Å³.
    da: f64,
    settings: &'a SolverSettings,
    /// States in the top J values of the basis.
    edge_states: usize,
    /// Per schedule element: the coupling of a finite interval whose pulses share one polarization.
    single: Vec<Option<Arc<Csr>>>,
    /// Thread-seconds spent on observables.
    observe: std::cell::Cell<f64>,
}

impl LabKernel<'_> {
    fn timed<T>(&self, f: impl FnOnce() -> T) -> T {
        let t = std::time::Instant::now();
        let out = f();
        self.observe.set(self.observe.get() + t.elapsed().as_secs_f64());
        out
    }
}

impl Kernel for LabKernel<'_> {
    type Item = Event;
    type Stretch = (PairCoefficients, Option<DetectorCoefficients>);

    fn observables(&self) -> usize {
        10
    }

    fn omega(&self) -> &[f64] {
        &self.ops.omega
    }

    fn edge(&self, state: &BlockState) -> f64 {
        state.edge_population(self.edge_states)
    }

    fn sample(&self, st: &BlockState, out: &mut [f64]) {
        // One change to the function basis serves the nine averages and ⟨cos²θ_2D⟩.
        let (ops, pops) = (self.ops, &self.pops);
        let (nine, two_d) = self.timed(|| {
            ops.in_functions(st, |f, cols| {
                (ops.expect_in(f, cols, st.k, pops), self.table.map(|t| ops.expect_detector_in(ops.detector(), t, f, cols, st.k, pops)).unwrap_or(0.0))
            })
        });
        for (i, x) in out.iter_mut().enumerate() {
            *x = self.g * if i < TWO_D_PART { nine[i] } else { two_d };
        }
    }

    fn stretch(&self, st: &BlockState) -> Self::Stretch {
        self.timed(|| (self.ops.coefficients(st, &self.pops), self.table.map(|t| self.ops.detector_coefficients(self.ops.detector(), t, st, &self.pops))))
    }

    fn free(&self, st: &mut BlockState, _index: usize, dt: f64) {
        st.free_with(&FreePhases::from_omega(&self.ops.omega, dt));
    }

    fn instant(&self, st: &mut BlockState, item: &Event) {
        if let Event::Kick { pulse, .. } = item {
            let p = &self.field.pulses[*pulse];
            self.ops.kick(st, p.kick_strength(self.da), &self.ops.coupling_for(&p.polarization));
        }
    }

    fn finite_kick(&self, index: usize, item: &Event, st: &mut BlockState, t: f64, h: f64) {
        let Event::Finite { pulses, .. } = item else { return };
        let rate_of = |i: usize| coupling_rad_per_ps_per_a3_wcm2() * self.da * self.field.pulses[i].peak_intensity_wcm2 * self.field.pulses[i].envelope(t);
        let rates: Vec<f64> = pulses.iter().map(|&i| rate_of(i)).collect();
        let total: f64 = rates.iter().sum();
        if total == 0.0 {
            return;
        }
        match &self.single[index] {
            Some(a) => self.ops.kick(st, h * total, a),
            None => {
                let mut w = [0.0; 3];
                for (&i, r) in pulses.iter().zip(&rates) {
                    let p = self.field.pulses[i].polarization;
                    let cw = Polarization { angle_rad: p.angle_deg.to_radians(), ellipticity: p.ellipticity }.coupling_weights();
                    for (x, c) in w.iter_mut().zip([cw[0].2, cw[1].2, cw[2].2]) {
                        *x += c * r / total;
                    }
                }
                self.ops.kick(st, h * total, &self.ops.coupling.combine(&w));
            }
        }
    }

    fn breaks(&self, item: &Event) -> Vec<f64> {
        item.breaks(self.field)
    }

    fn step(&self, step_ps: f64) -> f64 {
        ALL_M_STEP.in_block(self.settings, step_ps, self.ops.fastest)
    }
}

/// Which samples each stretch takes: per event, the field-free samples before it (first, end), and the
/// first sample after the last event, walked as [`super::driver::walk`] walks them: samples inside a
/// finite interval (its start included, its end not) are taken during the propagation; a sample at a
/// kick's time comes after the kick.
fn sample_plan(events: &[Event], times: &[f64]) -> (Vec<Option<(usize, usize)>>, usize) {
    let mut cursor = SampleCursor::new(times);
    let mut gaps = vec![];
    for ev in events {
        let (s, e) = ev.span();
        let gap = cursor.before(s);
        gaps.push((!gap.is_empty()).then_some((gap.start, gap.end)));
        if matches!(ev, Event::Finite { .. }) {
            cursor.at(s);
            cursor.inside(e);
        }
    }
    (gaps, cursor.position())
}

/// Estimated memory of the operators of an all-M block of `size` states and of the columns one worker
/// propagates through it, bytes: about 11 kB of operators a state (measured by `LabOps::bytes` for an
/// asymmetric top at J = 36; linear rotors need less) and [`CHUNK`] columns with three work copies.
fn lab_ops_bytes(size: usize) -> f64 {
    size as f64 * (12e3 + (CHUNK * 16 * 3) as f64)
}

/// Part of an all-M sample (and of its pair sums) holding ⟨Φ_Fg²⟩, the squared direction cosine of lab
/// axis F (0 X, 1 Y, 2 Z) with the body axis at frame position g.
pub fn direction_part(lab: usize, position: usize) -> usize {
    3 * lab + position
}

/// Part of an all-M sample (and of its pair sums) holding ⟨cos²θ_2D⟩, after the nine direction cosines.
pub const TWO_D_PART: usize = 9;

/// One initial state: (M combination index, J, level index within J, population).
type Column = (usize, i64, usize, f64);

/// Operators cached across runs stay below this many bytes.
const OPS_CACHE_BYTES: usize = 2 << 30;

/// The all-M solver for one rotor at one temperature (operators cached across runs).
pub struct LabSolver {
    /// The rotor.
    pub rotor: LabRotor,
    settings: SolverSettings,
    cache: Mutex<HashMap<LabBlock, Arc<LabOps>>>,
    /// θ tables of the detector-plane operator per level class (grown when a larger basis needs them).
    detector_tables: Mutex<HashMap<usize, Arc<DetectorTable>>>,
    timing: Mutex<LabTiming>,
    /// Where finished chunks are counted (shared with the owning `Solver`).
    pub progress: Arc<super::RunProgress>,
}

impl LabSolver {
    /// A solver for `rotor` with `settings`.
    pub fn new(rotor: LabRotor, settings: SolverSettings) -> LabSolver {
        LabSolver {
            rotor,
            settings,
            cache: Mutex::new(HashMap::new()),
            detector_tables: Mutex::new(HashMap::new()),
            timing: Mutex::new(LabTiming::default()),
            progress: Default::default(),
        }
    }

    /// The detector-plane θ table of level class `class` covering J ≤ `j_max` (None: no detector axis).
    fn detector_table(&self, class: usize, j_max: i64) -> Option<Arc<DetectorTable>> {
        let axis = self.rotor.detector_axis?;
        let mut tables = self.detector_tables.lock().expect("detector tables");
        if let Some(t) = tables.get(&class).filter(|t| t.j_max >= j_max) {
            return Some(t.clone());
        }
        let basis = TopBlockBasis::new(&self.rotor.frame, TopBlock { m: 0, sym: self.rotor.classes[class].sym, j_max });
        let ks: Vec<i64> = basis.functions.iter().map(|f| f.k).collect();
        let t = Arc::new(DetectorTable::new(&ks, j_max, axis));
        tables.insert(class, t.clone());
        Some(t)
    }

    /// Number of states in the all-M `block` (counted from its slices; the operators are not built).
    fn block_size(&self, block: LabBlock) -> usize {
        let class = &self.rotor.classes[block.class];
        TopBlockBasis::new(&self.rotor.frame, TopBlock { m: 0, sym: class.sym, j_max: block.j_max })
            .j_ranges
            .iter()
            .filter(|&&(j, _, _)| class.j_parity.is_none_or(|p| j % 2 == p))
            .map(|&(j, _, nk)| nk * block_mus(j, block.s, block.m_parity).len())
            .sum()
    }

    /// Refuse a run whose largest all-M operators, one set per worker thread with the columns each
    /// propagates, would not fit in [`crate::resources::MEMORY_SHARE`] of the available memory; the
    /// error names what drives the basis: the pulses (their reach) or the temperature (the thermal top).
    fn check_memory(&self, chunks: &[(LabBlock, Vec<Column>)], reach: i64) -> Result<()> {
        let Some((block, cols)) = chunks.iter().max_by_key(|c| c.0.j_max) else {
            return Ok(());
        };
        let size = self.block_size(*block);
        let bytes = lab_ops_bytes(size) * rayon::current_num_threads().max(1) as f64;
        let j_top = cols.last().map(|c| c.1).unwrap_or(0);
        let key = if reach >= j_top { "pulses" } else { "temperature_k" };
        crate::resources::check_memory(bytes, key, &format!("the all-M basis up to J = {} ({size} states a block)", block.j_max))
    }

    /// Where the time of the last run went.
    pub fn last_timing(&self) -> LabTiming {
        *self.timing.lock().expect("timing lock")
    }

    fn ops(&self, block: LabBlock) -> Arc<LabOps> {
        if let Some(o) = self.cache.lock().expect("cache lock").get(&block) {
            return o.clone();
        }
        let o = Arc::new(LabOps::new(&self.rotor, block));
        let mut cache = self.cache.lock().expect("cache lock");
        let held: usize = cache.values().map(|c| c.bytes()).sum();
        if held + o.bytes() <= OPS_CACHE_BYTES {
            cache.insert(block, o.clone());
        }
        o
    }

    /// Energies (cm⁻¹) of the levels of every (class, J) that the coefficients refer to.
    fn level_energies(&self, a: &Coefficients, b: &[Coefficients]) -> HashMap<(usize, i64), Vec<f64>> {
        let mut top: HashMap<usize, i64> = HashMap::new();
        for c in std::iter::once(a).chain(b) {
            for (class, acc) in &c.classes {
                let j = acc.keys().map(|k| k.0 + k.1).max().unwrap_or(0);
                let e = top.entry(*class).or_insert(0);
                *e = (*e).max(j);
            }
            for (class, acc) in c.detector.iter().flat_map(|d| d.0.iter()) {
                let j = acc.keys().map(|k| k.0.max(k.1)).max().unwrap_or(0);
                let e = top.entry(*class).or_insert(0);
                *e = (*e).max(j);
            }
        }
        let mut out = HashMap::new();
        for (class, j_max) in top {
            let basis = TopBlockBasis::new(&self.rotor.frame, TopBlock { m: 0, sym: self.rotor.classes[class].sym, j_max });
            for &(j, s, n) in &basis.j_ranges {
                out.insert((class, j), basis.energies_cm[s..s + n].to_vec());
            }
        }
        out
    }

    /// Run the `events` of `field` (kicks or finite intervals, in time order) with `reach` J values of
    /// room above each initial level, sampling at `times_ps` (ascending); `with_2d` adds ⟨cos²θ_2D⟩.
    pub fn run(&self, field: &FieldModel, events: &[Event], reach: i64, times_ps: &[f64], with_2d: bool) -> Result<LabRun> {
        let with_2d = with_2d && self.rotor.detector_axis.is_some();
        let m_parity_kept = field.pulses.iter().all(|p| p.peak_intensity_wcm2 == 0.0 || p.polarization.keeps_xz_axes());
        let t_first = events.first().map(|e| e.span().0).or(times_ps.first().copied()).unwrap_or(0.0);
        // Chunks: per block, initial states (level, M combination) sorted by J, CHUNK at a time.
        let mut chunks: Vec<(LabBlock, Vec<Column>)> = vec![];
        for (ci, class) in self.rotor.classes.iter().enumerate() {
            for s in [1i64, -1] {
                let parities: &[Option<i64>] = if m_parity_kept { &[Some(0), Some(1)] } else { &[None] };
                for &m_parity in parities {
                    let mut cols = vec![];
                    for &(j, i, pop) in &class.levels {
                        for (mu, _) in block_mus(j, s, m_parity).iter().enumerate() {
                            cols.push((mu, j, i, pop));
                        }
                    }
                    for part in cols.chunks(CHUNK) {
                        let j_top = part.last().map(|c| c.1).unwrap_or(0);
                        let j_max = ((j_top + reach + 3) / 4 * 4).min(MAX_LAB_BASIS_J);
                        if j_top + reach > MAX_LAB_BASIS_J {
                            return Err(Error::input(
                                "pulses",
                                format!(
                                    "the pulses would drive the rotor beyond J = {MAX_LAB_BASIS_J}, the largest all-M basis kicktrain uses; expected weaker pulses or a lower temperature"
                                ),
                            ));
                        }
                        chunks.push((LabBlock { class: ci, s, m_parity, j_max }, part.to_vec()));
                    }
                }
            }
        }
        self.check_memory(&chunks, reach)?;
        let started = std::time::Instant::now();
        let mut timing = LabTiming::default();
        let (plan, final_from) = sample_plan(events, times_ps);
        let gap_count = plan.iter().flatten().count();
        let mut values = vec![[0.0; 10]; times_ps.len()];
        let mut gap_coeffs: Vec<Coefficients> = (0..gap_count).map(|_| Coefficients::default()).collect();
        let mut final_coeffs = Coefficients::default();
        let mut reports: HashMap<(usize, i64, Option<i64>), BlockReport> = HashMap::new();
        // Largest bases first (the longest chunks start early and no thread idles at the end of a group);
        // results are merged in this fixed order, so they do not depend on thread timing.
        chunks.sort_by_key(|c| std::cmp::Reverse(c.0.j_max));
        let group = 16 * rayon::current_num_threads().max(1);
        self.progress.plan(chunks.len());
        for batch in chunks.chunks(group) {
            let outcomes: Vec<ChunkOutcome> = batch
                .par_iter()
                .map(|(block, cols)| {
                    let r = self.run_chunk(*block, cols, &Run { field, items: events, times: times_ps, t_first }, with_2d);
                    self.progress.finish_one();
                    r
                })
                .collect::<Result<Vec<_>>>()?;
            for o in outcomes {
                timing.propagate_cpu_s += o.propagate_s;
                timing.retries += o.retries;
                timing.retry_cpu_s += o.retry_s;
                timing.observe_cpu_s += o.observe_s;
                for (acc, v) in values.iter_mut().zip(&o.values) {
                    for (a, b) in acc.iter_mut().zip(v) {
                        *a += b;
                    }
                }
                for (acc, (c, d)) in gap_coeffs.iter_mut().zip(o.gaps) {
                    acc.add(o.class, o.weight, c, d);
                }
                final_coeffs.add(o.class, o.weight, o.final_coeffs.0, o.final_coeffs.1);
                let r = reports.entry((o.block.class, o.block.s, o.block.m_parity)).or_insert_with(|| {
                    let c = &self.rotor.classes[o.block.class];
                    let class = match c.sym {
                        TopSym::K(_) if self.rotor.linear => BlockSymmetry::JParity(c.j_parity.unwrap_or(0) as u32),
                        sym => BlockSymmetry::of_top_class(sym, &self.rotor.frame),
                    };
                    let parity = BlockSymmetry::AllM { class: Box::new(class), c2y: o.block.s, m_parity: o.block.m_parity };
                    BlockReport { m: 0, parity, j_max: 0, size: 0, edge_population: 0.0 }
                });
                r.j_max = r.j_max.max(o.j_max as u32);
                r.size = r.size.max(o.size);
                r.edge_population = r.edge_population.max(o.edge);
            }
        }
        let sums_started = std::time::Instant::now();
        // Field-free stretches: each starts where the previous event ended (or at the first event).
        let mut gap_spans = vec![];
        let mut t_prev = t_first;
        for (ev, gap) in events.iter().zip(&plan) {
            if let Some((from, to)) = gap {
                gap_spans.push((*from, *to, t_prev));
            }
            t_prev = ev.span().1;
        }
        let t_final = if events.is_empty() { t_first } else { t_prev };
        let levels = self.level_energies(&final_coeffs, &gap_coeffs);
        let energies = |c: usize, j: i64| levels[&(c, j)].clone();
        for ((from, to, t0), acc) in gap_spans.iter().zip(gap_coeffs) {
            let sums = acc.into_sums(*t0, &energies);
            sums.eval_series(&times_ps[*from..*to], |i, v| {
                for (o, x) in v.into_iter().enumerate() {
                    values[from + i][o] += x;
                }
            });
        }
        let final_sums = final_coeffs.into_sums(t_final, &energies);
        final_sums.eval_series(&times_ps[final_from..], |i, v| {
            for (o, x) in v.into_iter().enumerate() {
                values[final_from + i][o] += x;
            }
        });
        timing.sums_s = sums_started.elapsed().as_secs_f64();
        timing.total_s = started.elapsed().as_secs_f64();
        *self.timing.lock().expect("timing lock") = timing;
        let mut out: [[Vec<f64>; 3]; 3] = Default::default();
        for (f, row) in out.iter_mut().enumerate() {
            for (g, series) in row.iter_mut().enumerate() {
                *series = values.iter().map(|v| v[direction_part(f, g)]).collect();
            }
        }
        let cos2_2d = with_2d.then(|| values.iter().map(|v| v[TWO_D_PART]).collect());
        let mut blocks: Vec<_> = reports.into_iter().collect();
        blocks.sort_by_key(|b| (b.0.0, -b.0.1, b.0.2));
        Ok(LabRun { values: out, cos2_2d, final_sums, blocks: blocks.into_iter().map(|b| b.1).collect() })
    }

    fn run_chunk(&self, block: LabBlock, cols: &[Column], run: &Run<Event>, with_2d: bool) -> Result<ChunkOutcome> {
        let (mut retries, mut retry_s) = (0, 0.0);
        let out = grow_basis(
            block.j_max as usize,
            MAX_LAB_BASIS_J as usize,
            |j_max| {
                let started = std::time::Instant::now();
                let block = LabBlock { j_max: j_max as i64, ..block };
                let ops = self.ops(block);
                let table = if with_2d { self.detector_table(block.class, block.j_max) } else { None };
                let out = self.try_chunk(&ops, cols, run, table.as_deref());
                if out.is_none() {
                    retries += 1;
                    retry_s += started.elapsed().as_secs_f64();
                }
                Ok(out)
            },
            || Error::Numerical(format!("all-M block {block:?}: the basis would need J > {MAX_LAB_BASIS_J}; lower the intensities or the temperature")),
        )?;
        Ok(ChunkOutcome { retries, retry_s, ..out })
    }

    fn try_chunk(&self, ops: &LabOps, cols: &[Column], run: &Run<Event>, table: Option<&DetectorTable>) -> Option<ChunkOutcome> {
        let Run { field, items: events, times, t_first } = *run;
        let start: Vec<usize> = cols
            .iter()
            .map(|&(mu, j, i, _)| {
                let sl = ops.slices.iter().find(|s| s.j == j).expect("initial level inside the basis");
                sl.start + mu * sl.nk + i
            })
            .collect();
        let chunk_started = std::time::Instant::now();
        let da = self.rotor.delta_alpha_a3;
        // Per finite interval: its coupling when every pulse in it has one polarization.
        let single: Vec<Option<Arc<Csr>>> = events
            .iter()
            .map(|ev| match ev {
                Event::Finite { pulses, .. } => {
                    let pols: Vec<PulsePolarization> = pulses.iter().map(|&i| field.pulses[i].polarization).collect();
                    pols.iter().all(|p| *p == pols[0]).then(|| ops.coupling_for(&pols[0]))
                }
                Event::Kick { .. } => None,
            })
            .collect();
        let kernel = LabKernel {
            ops,
            pops: cols.iter().map(|c| c.3).collect(),
            g: self.rotor.classes[ops.block.class].weight,
            table,
            field,
            da,
            settings: &self.settings,
            edge_states: ops.edge_states(),
            single,
            observe: std::cell::Cell::new(0.0),
        };
        let w = walk(&kernel, BlockState::new(ops.size, &start, t_first), events, times, self.settings.edge_tolerance)?;
        let values: Vec<[f64; 10]> = match w.values.as_slice() {
            [] => vec![],
            v => (0..times.len()).map(|i| std::array::from_fn(|o| v[o][i])).collect(),
        };
        let gaps = w.stretches.into_iter().map(|s| s.2).collect();
        let final_coeffs = kernel.stretch(&w.state);
        let observe = kernel.observe.get();
        let total = chunk_started.elapsed().as_secs_f64();
        Some(ChunkOutcome {
            propagate_s: total - observe,
            retries: 0,
            retry_s: 0.0,
            observe_s: observe,
            class: ops.block.class,
            weight: kernel.g,
            values,
            gaps,
            final_coeffs,
            block: ops.block,
            j_max: ops.block.j_max,
            size: ops.size,
            edge: w.edge,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::molecule::top::Top;
    use crate::simulate::top::TopSolver;

    /// A state as primitive components ((J, K, M), coefficient).
    type Expansion = Vec<((i64, i64, i64), f64)>;

    /// The primitive components of every function-basis state of `ops`.
    fn primitives(ops: &LabOps) -> Vec<Expansion> {
        let mut out = vec![vec![]; ops.size];
        for sl in &ops.slices {
            let (_, fs, nk) = ops.basis.j_ranges[sl.range];
            for (mu, &m) in sl.mus.iter().enumerate() {
                let (mc, nm) = combo(sl.j, m, ops.block.s);
                for x in 0..nk {
                    let (kc, nkc) = ops.basis.functions[fs + x].components();
                    for &(mm, a) in &mc[..nm] {
                        for &(kk, b) in &kc[..nkc] {
                            out[sl.start + mu * nk + x].push(((sl.j, kk, mm), a * b));
                        }
                    }
                }
            }
        }
        out
    }

    /// Σ_g α̃_g ⟨bra|(ê·n_g)² coupling|ket⟩ between two expanded states (quadrature-verified elements).
    fn reference(rotor: &LabRotor, pol: Polarization, bra: &[((i64, i64, i64), f64)], ket: &[((i64, i64, i64), f64)]) -> f64 {
        let mut v = Complex64::new(0.0, 0.0);
        for &(b, cb) in bra {
            for &(k, ck) in ket {
                for g in 0..3 {
                    if rotor.alpha_weights[g] != 0.0 {
                        v += pol.coupling_element(g, b, k) * (cb * ck * rotor.alpha_weights[g]);
                    }
                }
            }
        }
        assert!(v.im.abs() < 1e-13);
        v.re
    }

    #[test]
    fn memory_estimate_covers_the_operators_it_stands_for() {
        // The count of states is checked against a closed form: the all-M functions |J K M⟩ up to J number
        // Σ (2J+1)² = (J+1)(2J+1)(2J+3)/3, split over four D2 classes, two C2(Y) signs and two M parities
        // (exact counting, common practice); the byte estimate against what the operators really hold.
        let top = Top::rigid(0.19, 0.025, 0.022, [20.0, 12.0, 9.0]);
        let ts = TopSolver::new(&top, 0.5, SolverSettings::default()).unwrap();
        let lab = LabSolver::new(LabRotor::from_top(&ts), SolverSettings::default());
        let j = 16i64;
        let mut total = 0;
        for class in 0..lab.rotor.classes.len() {
            for s in [1, -1] {
                for m_parity in [Some(0), Some(1)] {
                    let block = LabBlock { class, s, m_parity, j_max: j };
                    let size = lab.block_size(block);
                    total += size;
                    if class == 0 && s == 1 && m_parity == Some(0) {
                        let ops = LabOps::new(&lab.rotor, block);
                        assert_eq!(ops.size, size);
                        let _ = ops.observables();
                        let held = ops.bytes() as f64;
                        let est = lab_ops_bytes(size);
                        assert!(est >= held && est < 4.0 * held, "estimate {est:.3e} B, operators {held:.3e} B");
                    }
                }
            }
        }
        assert_eq!(total as i64, (j + 1) * (2 * j + 1) * (2 * j + 3) / 3);
    }

    #[test]
    fn block_couplings_match_primitive_elements_and_no_coupling_crosses_the_symmetry_split() {
        // Reference: Polarization::coupling_element on primitive |J K M⟩ (checked against Euler-angle
        // quadrature in basis::lab), expanded over the Wang and M combinations by hand. A tilted
        // elliptical field couples nothing between C₂(Y) = ±1; a field with axes along Z and X couples
        // nothing between M even and odd. Asymmetric top (0.19, 0.025, 0.022) cm⁻¹, α = (20, 12, 9) Å³.
        let top = Top::rigid(0.19, 0.025, 0.022, [20.0, 12.0, 9.0]);
        let ts = TopSolver::new(&top, 0.5, SolverSettings::default()).unwrap();
        let rotor = LabRotor::from_top(&ts);
        let cases = [(PulsePolarization { angle_deg: 30.0, ellipticity: 0.4 }, None), (PulsePolarization { angle_deg: 90.0, ellipticity: 0.6 }, Some(1))];
        for class in 0..rotor.classes.len() {
            for (pol, m_parity) in cases {
                let p = Polarization { angle_rad: pol.angle_deg.to_radians(), ellipticity: pol.ellipticity };
                let ops = LabOps::new(&rotor, LabBlock { class, s: 1, m_parity, j_max: 4 });
                let other_s = LabOps::new(&rotor, LabBlock { class, s: -1, m_parity, j_max: 4 });
                let dense = ops.coupling_for(&pol).to_dense();
                let (mine, theirs) = (primitives(&ops), primitives(&other_s));
                for a in 0..ops.size {
                    for b in 0..ops.size {
                        let want = reference(&rotor, p, &mine[a], &mine[b]);
                        assert!((dense[(a, b)] - want).abs() < 1e-13, "class {class} {pol:?} ({a}, {b}): {} vs {want}", dense[(a, b)]);
                    }
                    for t in &theirs {
                        assert!(reference(&rotor, p, &mine[a], t).abs() < 1e-13, "C2(Y) split leaks");
                    }
                }
                if let Some(mp) = m_parity {
                    let other_m = primitives(&LabOps::new(&rotor, LabBlock { class, s: 1, m_parity: Some(1 - mp), j_max: 4 }));
                    for a in &mine {
                        for t in &other_m {
                            assert!(reference(&rotor, p, a, t).abs() < 1e-13, "M parity split leaks");
                        }
                    }
                }
                // Nine observables: Σ over lab axes of Φ_Fg² is the identity for each body axis.
                let obs = ops.observables();
                let sum: DMatrix<f64> =
                    (0..3).map(|f| obs.combine(&std::array::from_fn::<f64, 9, _>(|o| if o == 3 * f + 1 { 1.0 } else { 0.0 })).to_dense()).sum();
                assert!((sum - DMatrix::identity(ops.size, ops.size)).abs().max() < 1e-13);
            }
        }
    }
}
