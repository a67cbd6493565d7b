//! The symmetric-top basis |J K M⟩ of symmetric and asymmetric tops, its symmetry blocks, the
//! field-free eigenstates and the matrices of direction-cosine operators.
//!
//! Wavefunctions are ψ_JKM = sqrt((2J+1)/8π²) D^J_{MK}(φ, θ, χ)* with D^J_{MK} = e^{−iMφ} d^J_{MK}(θ)
//! e^{−iKχ}; K is the projection on the body axis z of the quantization frame (see `Top::frame`).
//! The lab-Z direction cosines of the frame axes are Φ_Zz = cosθ, Φ_Zx = −sinθ cosχ, Φ_Zy = sinθ sinχ.
//!
//! A linearly polarized field conserves M. Operators built from Φ_Zi² (the laser coupling and the
//! alignment observables) and the field-free Hamiltonian also conserve the parity of K and commute
//! with P|J K⟩ = (−1)^J |J −K⟩ (the two-fold rotation about the frame's x axis), so each M splits
//! into four blocks (K even/odd, P = ±1) spanned by Wang combinations (|J K⟩ ± |J −K⟩)/√2. A dipole
//! along z (cosθ) keeps the parity of K but flips P. Symmetric tops conserve K itself.

use super::wigner::{small_d_series, three_j};
use crate::molecule::top::{BodyAxis, Top, TopKind};
use crate::numeric::{Banded, sorted_eigen};
use nalgebra::DMatrix;
use std::collections::HashMap;

/// A top's constants in its quantization frame (z, x, y), cm⁻¹.
#[derive(Debug, Clone, PartialEq)]
pub struct TopFrame {
    /// Body axes taken as (z, x, y).
    pub axes: [BodyAxis; 3],
    /// Rotational constant of the z axis, cm⁻¹.
    pub az: f64,
    /// Rotational constant of the x axis, cm⁻¹.
    pub bx: f64,
    /// Rotational constant of the y axis, cm⁻¹.
    pub by: f64,
    /// Distortion D_J, D_JK, D_K (cm⁻¹); zero for asymmetric tops.
    pub distortion: [f64; 3],
    /// True for symmetric tops (K conserved).
    pub symmetric: bool,
}

impl TopFrame {
    /// The frame of `top`; `polar` puts an asymmetric top's dipole axis along z.
    pub fn new(top: &Top, polar: bool) -> TopFrame {
        let axes = top.frame(polar);
        TopFrame {
            axes,
            az: top.constant(axes[0]),
            bx: top.constant(axes[1]),
            by: top.constant(axes[2]),
            distortion: [top.d_j_cm, top.d_jk_cm, top.d_k_cm],
            symmetric: top.kind() != TopKind::Asymmetric,
        }
    }

    /// ⟨J K'|H0|J K⟩ in cm⁻¹ (non-zero for K' = K, K ± 2): ½(B_x + B_y)[J(J+1) − K²] + A_z K² minus the
    /// symmetric-top distortion D_J J²(J+1)² + D_JK J(J+1)K² + D_K K⁴ on the diagonal, and
    /// ¼(B_x − B_y) sqrt{[J(J+1) − K(K+1)][J(J+1) − (K+1)(K+2)]} between K and K + 2.
    pub fn h0(&self, j: i64, kp: i64, k: i64) -> f64 {
        let x = (j * (j + 1)) as f64;
        if kp == k {
            let kk = (k * k) as f64;
            let [dj, djk, dk] = self.distortion;
            0.5 * (self.bx + self.by) * (x - kk) + self.az * kk - dj * x * x - djk * x * kk - dk * kk * kk
        } else if (kp - k).abs() == 2 {
            let lo = kp.min(k) as f64;
            0.25 * (self.bx - self.by) * ((x - lo * (lo + 1.0)) * (x - (lo + 1.0) * (lo + 2.0))).max(0.0).sqrt()
        } else {
            0.0
        }
    }

    /// Position (0 = z, 1 = x, 2 = y) of a body axis in the frame.
    pub fn position(&self, axis: BodyAxis) -> usize {
        self.axes.iter().position(|a| *a == axis).expect("frame holds every axis")
    }
}

/// A combination c₀·1 + Σ c·D^rank_{0q}(Ω)* of rotation-matrix elements (a function of the orientation).
#[derive(Debug, Clone, PartialEq)]
pub struct AngularOperator {
    /// Coefficient of the identity.
    pub identity: f64,
    /// (rank, q, coefficient) of each D^rank_{0q}* term.
    pub terms: Vec<(i64, i64, f64)>,
}

impl AngularOperator {
    /// Φ_Zz² = cos²θ = 1/3 + (2/3) D²₀₀*.
    pub fn cos2_z() -> AngularOperator {
        AngularOperator { identity: 1.0 / 3.0, terms: vec![(2, 0, 2.0 / 3.0)] }
    }

    /// Φ_Zx² = sin²θ cos²χ = 1/3 − (1/3) D²₀₀* + ½ sqrt(2/3) (D²₀₂* + D²₀₋₂*).
    pub fn cos2_x() -> AngularOperator {
        let s = 0.5 * (2.0f64 / 3.0).sqrt();
        AngularOperator { identity: 1.0 / 3.0, terms: vec![(2, 0, -1.0 / 3.0), (2, 2, s), (2, -2, s)] }
    }

    /// Φ_Zy² = sin²θ sin²χ = 1/3 − (1/3) D²₀₀* − ½ sqrt(2/3) (D²₀₂* + D²₀₋₂*).
    pub fn cos2_y() -> AngularOperator {
        let s = 0.5 * (2.0f64 / 3.0).sqrt();
        AngularOperator { identity: 1.0 / 3.0, terms: vec![(2, 0, -1.0 / 3.0), (2, 2, -s), (2, -2, -s)] }
    }

    /// Φ_Zz = cosθ = D¹₀₀*.
    pub fn cos_z() -> AngularOperator {
        AngularOperator { identity: 0.0, terms: vec![(1, 0, 1.0)] }
    }

    /// Φ_Zi² for the frame position i (0 = z, 1 = x, 2 = y).
    pub fn cos2_position(i: usize) -> AngularOperator {
        match i {
            0 => AngularOperator::cos2_z(),
            1 => AngularOperator::cos2_x(),
            _ => AngularOperator::cos2_y(),
        }
    }

    /// Φ_Zz³ = cos³θ = (3/5) D¹₀₀* + (2/5) D³₀₀* (cos³θ = (3/5) P₁ + (2/5) P₃).
    pub fn cos3_z() -> AngularOperator {
        AngularOperator { identity: 0.0, terms: vec![(1, 0, 0.6), (3, 0, 0.4)] }
    }

    /// The product of two such functions, by the Clebsch–Gordan series of rotation matrices
    /// D^{j1}_{0q1}* D^{j2}_{0q2}* = Σ_L ⟨j1 0 j2 0|L 0⟩⟨j1 q1 j2 q2|L q1+q2⟩ D^L_{0,q1+q2}* (R. N. Zare,
    /// Angular Momentum, eq. 3.115, conjugated).
    pub fn times(&self, other: &AngularOperator) -> AngularOperator {
        let cg = |j1: i64, m1: i64, j2: i64, m2: i64, j: i64, m: i64| -> f64 {
            let phase = if (j1 - j2 + m).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
            phase * ((2 * j + 1) as f64).sqrt() * three_j(j1, j2, j, m1, m2, -m)
        };
        let mut identity = self.identity * other.identity;
        let mut acc: std::collections::BTreeMap<(i64, i64), f64> = Default::default();
        for &(r, q, c) in &other.terms {
            *acc.entry((r, q)).or_insert(0.0) += self.identity * c;
        }
        for &(r, q, c) in &self.terms {
            *acc.entry((r, q)).or_insert(0.0) += other.identity * c;
        }
        for &(r1, q1, c1) in &self.terms {
            for &(r2, q2, c2) in &other.terms {
                let q = q1 + q2;
                for l in (r1 - r2).abs()..=(r1 + r2) {
                    if q.abs() > l {
                        continue;
                    }
                    let v = c1 * c2 * cg(r1, 0, r2, 0, l, 0) * cg(r1, q1, r2, q2, l, q);
                    if l == 0 {
                        identity += v;
                    } else {
                        *acc.entry((l, q)).or_insert(0.0) += v;
                    }
                }
            }
        }
        AngularOperator { identity, terms: acc.into_iter().filter(|e| e.1.abs() > 1e-15).map(|((r, q), c)| (r, q, c)).collect() }
    }

    /// Highest rank of the terms.
    pub fn rank(&self) -> i64 {
        self.terms.iter().map(|t| t.0).max().unwrap_or(0)
    }

    /// ⟨J' K' M|O|J K M⟩ between primitive states:
    /// ⟨J'K'M|D^r_{0q}*|JKM⟩ = sqrt((2J+1)(2J'+1)) (−1)^{M−K−q} (J' r J; M 0 −M)(J' r J; K' −q −K).
    pub fn element(&self, jp: i64, kp: i64, j: i64, k: i64, m: i64) -> f64 {
        let mut v = if jp == j && kp == k { self.identity } else { 0.0 };
        for &(r, q, c) in &self.terms {
            if kp != k + q || (jp - j).abs() > r {
                continue;
            }
            let a = three_j(jp, r, j, m, 0, -m);
            if a == 0.0 {
                continue;
            }
            let b = three_j(jp, r, j, kp, -q, -k);
            let phase = if (m - k - q).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
            v += c * phase * (((2 * j + 1) * (2 * jp + 1)) as f64).sqrt() * a * b;
        }
        v
    }
}

/// Symmetry label of a block of fixed M.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum TopSym {
    /// Symmetric top: fixed projection K on the figure axis (signed).
    K(i64),
    /// Asymmetric top in a laser field: parity of K (0, 1) and eigenvalue of P (±1).
    Wang {
        /// Parity of K.
        k_parity: i64,
        /// Eigenvalue ±1 of P|J K⟩ = (−1)^J |J −K⟩.
        p: i64,
    },
    /// Asymmetric top with a dipole coupling along z: parity of K only.
    KParity(i64),
    /// M = 0 with a dipole coupling along z: parity of K and the eigenvalue σ = ±1 of the reflection
    /// through a lab plane containing Z, σ|J K 0⟩ = (−1)^K |J −K 0⟩ (it keeps the fields along Z and
    /// turns the dipole operator cosθ into itself). Functions: (|J k⟩ + s|J −k⟩)/√2 with s = σ(−1)^k,
    /// and |J 0⟩ in σ = +1.
    Reflection {
        /// Parity of K.
        k_parity: i64,
        /// Eigenvalue ±1 of the reflection.
        sigma: i64,
    },
}

impl TopSym {
    /// Parities of (Ka, Kc) of the levels of an asymmetric-top block in `frame` (Wang blocks only):
    /// the characters of the two-fold rotations are (−1)^K about z, P about x, (−1)^K P about y.
    pub fn ka_kc_parity(&self, frame: &TopFrame) -> Option<(u32, u32)> {
        let TopSym::Wang { k_parity, p } = *self else { return None };
        let cz = if k_parity == 0 { 1 } else { -1 };
        let chars = [cz, p, cz * p];
        let par = |axis: BodyAxis| if chars[frame.position(axis)] == 1 { 0 } else { 1 };
        Some((par(BodyAxis::A), par(BodyAxis::C)))
    }
}

/// One block: fixed M, a symmetry label and the highest J kept.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct TopBlock {
    /// M, the projection on the lab Z axis.
    pub m: i64,
    /// Symmetry label.
    pub sym: TopSym,
    /// Highest J in the basis.
    pub j_max: i64,
}

/// A basis function: the primitive |J k M⟩ (s = 0) or the Wang combination (|J k⟩ + s|J −k⟩)/√2 (k > 0, s = ±1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BasisFunction {
    /// J.
    pub j: i64,
    /// K (signed for primitive functions, > 0 for Wang combinations).
    pub k: i64,
    /// 0 for primitive, ±1 for Wang combinations.
    pub s: i64,
}

impl BasisFunction {
    /// (K, coefficient) of the primitive components.
    pub fn components(&self) -> ([(i64, f64); 2], usize) {
        if self.s == 0 {
            ([(self.k, 1.0), (0, 0.0)], 1)
        } else {
            let c = std::f64::consts::FRAC_1_SQRT_2;
            ([(self.k, c), (-self.k, self.s as f64 * c)], 2)
        }
    }
}

impl TopBlock {
    /// Lowest J with at least one function in the block.
    pub fn j_min(&self) -> i64 {
        let base = match self.sym {
            TopSym::K(k) => self.m.abs().max(k.abs()),
            _ => self.m.abs(),
        };
        let mut j = base;
        while j <= base + 2 && self.functions_of_j(j).is_empty() {
            j += 1;
        }
        j
    }

    /// The block's functions of one J, in K order.
    pub fn functions_of_j(&self, j: i64) -> Vec<BasisFunction> {
        if j < self.m.abs() {
            return vec![];
        }
        match self.sym {
            TopSym::K(k) => {
                if j >= k.abs() {
                    vec![BasisFunction { j, k, s: 0 }]
                } else {
                    vec![]
                }
            }
            TopSym::Wang { k_parity, p } => {
                let sign_j = if j % 2 == 0 { 1 } else { -1 };
                (0..=j)
                    .filter(|k| k % 2 == k_parity)
                    .filter_map(|k| if k == 0 { (sign_j == p).then_some(BasisFunction { j, k: 0, s: 0 }) } else { Some(BasisFunction { j, k, s: p * sign_j }) })
                    .collect()
            }
            TopSym::KParity(par) => (-j..=j).filter(|k| k.rem_euclid(2) == par).map(|k| BasisFunction { j, k, s: 0 }).collect(),
            TopSym::Reflection { k_parity, sigma } => {
                let s = sigma * if k_parity == 0 { 1 } else { -1 };
                (0..=j)
                    .filter(|k| k % 2 == k_parity)
                    .filter_map(|k| if k == 0 { (sigma == 1).then_some(BasisFunction { j, k: 0, s: 0 }) } else { Some(BasisFunction { j, k, s }) })
                    .collect()
            }
        }
    }

    /// Every function of the block, J ascending.
    pub fn functions(&self) -> Vec<BasisFunction> {
        (self.m.abs()..=self.j_max).flat_map(|j| self.functions_of_j(j)).collect()
    }
}

/// Key of a function for lookups: (J, K) for primitive functions, (J, |K|) for Wang combinations.
fn key(f: &BasisFunction) -> (i64, i64) {
    (f.j, f.k)
}

/// A block's basis, field-free eigenstates (per J, energies ascending) and operator matrices.
#[derive(Debug, Clone)]
pub struct TopBlockBasis {
    /// The block.
    pub block: TopBlock,
    /// The functions, J ascending.
    pub functions: Vec<BasisFunction>,
    /// (J, first index, count) of each J present.
    pub j_ranges: Vec<(i64, usize, usize)>,
    /// Field-free energies of the eigenstates, cm⁻¹ (same order as the functions: by J, then ascending).
    pub energies_cm: Vec<f64>,
    /// Per J range: eigenvectors as columns in the function basis, signs fixed (largest component positive).
    pub vectors: Vec<DMatrix<f64>>,
    index: HashMap<(i64, i64), usize>,
}

impl TopBlockBasis {
    /// Build the block's basis and diagonalize H0 for each J.
    pub fn new(frame: &TopFrame, block: TopBlock) -> TopBlockBasis {
        let functions = block.functions();
        let mut j_ranges: Vec<(i64, usize, usize)> = vec![];
        for (i, f) in functions.iter().enumerate() {
            match j_ranges.last_mut() {
                Some(r) if r.0 == f.j => r.2 += 1,
                _ => j_ranges.push((f.j, i, 1)),
            }
        }
        let index = functions.iter().enumerate().map(|(i, f)| (key(f), i)).collect();
        let mut energies_cm = vec![0.0; functions.len()];
        let mut vectors = vec![];
        for &(j, start, n) in &j_ranges {
            let h = DMatrix::from_fn(n, n, |r, c| pair_element(&functions[start + r], &functions[start + c], |kp, k| frame.h0(j, kp, k)));
            let (vals, vecs) = sorted_eigen(h);
            energies_cm[start..start + n].copy_from_slice(&vals);
            vectors.push(vecs);
        }
        TopBlockBasis { block, functions, j_ranges, energies_cm, vectors, index }
    }

    /// Number of basis states.
    pub fn size(&self) -> usize {
        self.functions.len()
    }

    /// J of eigenstate (or function) n.
    pub fn j(&self, n: usize) -> i64 {
        self.functions[n].j
    }

    /// Non-zero elements (row, column, value) of `op` between the block's basis functions.
    pub fn function_triplets(&self, op: &AngularOperator) -> Vec<(usize, usize, f64)> {
        let m = self.block.m;
        let r = op.rank();
        let mut out = vec![];
        let qs: Vec<i64> = op.terms.iter().map(|t| t.1).chain(std::iter::once(0)).collect();
        let mut cand: Vec<usize> = vec![];
        for (b, g) in self.functions.iter().enumerate() {
            cand.clear();
            let (comps, nc) = g.components();
            for &(k2, _) in &comps[..nc] {
                for &q in &qs {
                    let k1 = k2 + q;
                    for jp in (g.j - r)..=(g.j + r) {
                        for kk in [k1, -k1] {
                            if let Some(&a) = self.index.get(&(jp, kk)) {
                                cand.push(a);
                            }
                        }
                    }
                }
            }
            cand.sort_unstable();
            cand.dedup();
            for &a in &cand {
                let f = &self.functions[a];
                let v = pair_element(f, g, |kp, k| op.element(f.j, kp, g.j, k, m));
                if v != 0.0 {
                    out.push((a, b, v));
                }
            }
        }
        out
    }

    /// Matrix of `op` between the block's basis functions (before the change to eigenstates).
    pub fn function_matrix(&self, op: &AngularOperator) -> DMatrix<f64> {
        let n = self.size();
        let mut out = DMatrix::zeros(n, n);
        for (a, b, v) in self.function_triplets(op) {
            out[(a, b)] = v;
        }
        out
    }

    /// Matrix of `op` between eigenstates, kept as the blocks between J values at most its rank apart.
    pub fn operator_banded(&self, op: &AngularOperator) -> Banded {
        let f = self.function_matrix_sparse_blocks(op);
        let mut blocks = vec![];
        for ((a, b), sub) in f {
            let (_, sa, _) = self.j_ranges[a];
            let (_, sb, _) = self.j_ranges[b];
            let t = self.vectors[a].transpose() * sub * &self.vectors[b];
            blocks.push((sa, sb, t));
        }
        blocks.sort_by_key(|b| (b.0, b.1));
        Banded { size: self.size(), blocks }
    }

    /// The function-basis matrix of `op` cut into (J range, J range) sub-blocks.
    fn function_matrix_sparse_blocks(&self, op: &AngularOperator) -> Vec<((usize, usize), DMatrix<f64>)> {
        let range_of: Vec<usize> = {
            let mut v = vec![0; self.size()];
            for (r, &(_, s, n)) in self.j_ranges.iter().enumerate() {
                v[s..s + n].iter_mut().for_each(|x| *x = r);
            }
            v
        };
        let mut map: HashMap<(usize, usize), DMatrix<f64>> = HashMap::new();
        for (a, b, v) in self.function_triplets(op) {
            let (ra, rb) = (range_of[a], range_of[b]);
            let (_, sa, na) = self.j_ranges[ra];
            let (_, sb, nb) = self.j_ranges[rb];
            map.entry((ra, rb)).or_insert_with(|| DMatrix::zeros(na, nb))[(a - sa, b - sb)] = v;
        }
        let mut out: Vec<_> = map.into_iter().collect();
        out.sort_by_key(|x| x.0);
        out
    }

    /// Matrix of `op` between the field-free eigenstates (ΔJ limited by the operator's rank).
    pub fn operator(&self, op: &AngularOperator) -> DMatrix<f64> {
        let f = self.function_matrix(op);
        self.to_eigenbasis(&f, op.rank())
    }

    /// Uᵀ F U for a function-basis matrix F coupling J values at most `max_dj` apart.
    pub fn to_eigenbasis(&self, f: &DMatrix<f64>, max_dj: i64) -> DMatrix<f64> {
        let n = self.size();
        let mut out = DMatrix::zeros(n, n);
        for (a, &(ja, sa, na)) in self.j_ranges.iter().enumerate() {
            for (b, &(jb, sb, nb)) in self.j_ranges.iter().enumerate() {
                if (ja - jb).abs() > max_dj {
                    continue;
                }
                let sub = f.view((sa, sb), (na, nb));
                let t = self.vectors[a].transpose() * sub * &self.vectors[b];
                out.view_mut((sa, sb), (na, nb)).copy_from(&t);
            }
        }
        out
    }

    /// Matrix of |Φ_Zi| (frame position i: 0 = z, 1 = x, 2 = y) between eigenstates, by quadrature in θ
    /// (Gauss–Legendre on [0, π/2] and [π/2, π]) and the exact Fourier coefficients of |cosχ| and |sinχ|.
    /// ⟨|Φ_Zi|⟩ is the detector-plane alignment ⟨cos²θ_2D⟩ of axis i for an ensemble symmetric about Z.
    pub fn abs_direction_cosine(&self, position: usize) -> DMatrix<f64> {
        let m = self.block.m;
        let j_max = self.block.j_max;
        let nq = (j_max + 24) as usize;
        let mut nodes = vec![];
        for (lo, hi) in [(0.0, std::f64::consts::FRAC_PI_2), (std::f64::consts::FRAC_PI_2, std::f64::consts::PI)] {
            let (x, w) = crate::quadrature::gauss_legendre(nq, lo, hi);
            for q in 0..nq {
                let th: f64 = x[q];
                let g = if position == 0 { th.cos().abs() } else { th.sin() };
                nodes.push((th, w[q] * g * th.sin()));
            }
        }
        // d^J_{MK}(θ_q) for every K of the block (rows J = 0..=j_max, columns q), and the weighted copy.
        let mut ks: Vec<i64> = self.functions.iter().flat_map(|f| if f.s == 0 { vec![f.k] } else { vec![f.k, -f.k] }).collect();
        ks.sort_unstable();
        ks.dedup();
        let nk = (2 * j_max + 1) as usize;
        let slot = |k: i64| (k + j_max) as usize;
        let mut d: Vec<Option<(DMatrix<f64>, DMatrix<f64>)>> = vec![None; nk];
        for &k in &ks {
            let mut dm = DMatrix::zeros((j_max + 1) as usize, nodes.len());
            for (q, &(th, _)) in nodes.iter().enumerate() {
                let col = small_d_series(m, k, th, j_max);
                for (j, v) in col.into_iter().enumerate() {
                    dm[(j, q)] = v;
                }
            }
            let mut dw = dm.clone();
            for (q, &(_, w)) in nodes.iter().enumerate() {
                dw.column_mut(q).scale_mut(w);
            }
            d[slot(k)] = Some((dm, dw));
        }
        let chi_factor = |dk: i64| -> f64 {
            if position == 0 {
                return if dk == 0 { 1.0 } else { 0.0 };
            }
            if dk % 2 != 0 {
                return 0.0;
            }
            // (1/2π)∫ e^{i n χ} |cosχ| dχ = 2(−1)^{n/2+1} / (π(n² − 1)); for |sinχ| an extra (−1)^{n/2}.
            let n = dk as f64;
            let half = (dk / 2).rem_euclid(2);
            let c = 2.0 * if half == 0 { -1.0 } else { 1.0 } / (std::f64::consts::PI * (n * n - 1.0));
            if position == 2 && half == 1 { -c } else { c }
        };
        // θ integrals per (K', K): T[J', J] = Σ_q w_q d^{J'}_{MK'}(θ_q) d^J_{MK}(θ_q), times the χ factor.
        let mut t: Vec<Option<DMatrix<f64>>> = vec![None; nk * nk];
        for &kp in &ks {
            for &k in &ks {
                let cf = chi_factor(k - kp);
                if cf == 0.0 {
                    continue;
                }
                let (dp, _) = d[slot(kp)].as_ref().expect("built");
                let (_, dw) = d[slot(k)].as_ref().expect("built");
                t[slot(kp) * nk + slot(k)] = Some(dp * dw.transpose() * cf);
            }
        }
        let prim = |jp: i64, kp: i64, j: i64, k: i64| -> f64 {
            match &t[slot(kp) * nk + slot(k)] {
                Some(tm) => 0.5 * (((2 * j + 1) * (2 * jp + 1)) as f64).sqrt() * tm[(jp as usize, j as usize)],
                None => 0.0,
            }
        };
        let n = self.size();
        let mut f = DMatrix::zeros(n, n);
        for b in 0..n {
            for a in 0..=b {
                let (fa, fb) = (&self.functions[a], &self.functions[b]);
                if position == 0 && fa.k.abs() != fb.k.abs() {
                    continue;
                }
                let v = pair_element(fa, fb, |kp, k| prim(fa.j, kp, fb.j, k));
                f[(a, b)] = v;
                f[(b, a)] = v;
            }
        }
        self.to_eigenbasis(&f, i64::MAX)
    }
}

/// ⟨f|O|g⟩ from the primitive elements `prim(K', K)` and the functions' components.
fn pair_element(f: &BasisFunction, g: &BasisFunction, prim: impl Fn(i64, i64) -> f64) -> f64 {
    let (cf, nf) = f.components();
    let (cg, ng) = g.components();
    let mut v = 0.0;
    for &(k1, c1) in &cf[..nf] {
        for &(k2, c2) in &cg[..ng] {
            v += c1 * c2 * prim(k1, k2);
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::basis::wigner::small_d_explicit;
    use crate::quadrature::gauss_legendre;
    use std::f64::consts::PI;

    /// The function c₀ + Σ c d^r_{0q}(θ) e^{iqχ} (real part; the imaginary parts cancel for real operators).
    fn value(op: &AngularOperator, th: f64, chi: f64) -> f64 {
        op.identity + op.terms.iter().map(|&(r, q, c)| c * small_d_explicit(r, 0, q, th) * (q as f64 * chi).cos()).sum::<f64>()
    }

    #[test]
    fn products_of_angular_operators_are_the_products_of_the_functions() {
        // Reference: the functions themselves, Φ_Zz = cosθ, Φ_Zx² = sin²θ cos²χ, Φ_Zy² = sin²θ sin²χ
        // (module doc), evaluated from Wigner's explicit d sum (Edmonds eq. 4.1.23) at scattered angles;
        // the definitions of cos2_x etc. are checked on the same footing first.
        let pts = [(0.3, 0.2), (1.1, 2.5), (2.0, -0.7), (2.9, 4.0)];
        for (th, chi) in pts {
            let (c, s) = (f64::cos(th), f64::sin(th));
            assert!((value(&AngularOperator::cos2_x(), th, chi) - s * s * f64::cos(chi).powi(2)).abs() < 1e-13);
            assert!((value(&AngularOperator::cos3_z(), th, chi) - c * c * c).abs() < 1e-13);
            let cx = AngularOperator::cos_z().times(&AngularOperator::cos2_x());
            assert!((value(&cx, th, chi) - c * s * s * f64::cos(chi).powi(2)).abs() < 1e-13, "{th} {chi}");
            let cy = AngularOperator::cos2_y().times(&AngularOperator::cos_z());
            assert!((value(&cy, th, chi) - c * s * s * f64::sin(chi).powi(2)).abs() < 1e-13);
            let c3 = AngularOperator::cos_z().times(&AngularOperator::cos_z()).times(&AngularOperator::cos_z());
            assert!((value(&c3, th, chi) - c * c * c).abs() < 1e-13);
        }
    }

    fn top(a: f64, b: f64, c: f64) -> Top {
        Top { alignment_axis: BodyAxis::A, dipole_axis: BodyAxis::A, ..Top::rigid(a, b, c, [20.0, 12.0, 9.0]) }
    }

    /// ⟨J'K'M|f|JKM⟩ by brute-force quadrature over all three Euler angles of the explicit wavefunctions
    /// ψ = sqrt((2J+1)/8π²) e^{iMφ} d^J_{MK}(θ) e^{iKχ}: uniform grids in φ and χ (exact for these
    /// trigonometric polynomials), Gauss–Legendre in cosθ. Returns (real, imaginary).
    fn quad(jp: i64, kp: i64, j: i64, k: i64, m: i64, f: impl Fn(f64, f64) -> f64) -> (f64, f64) {
        let (nphi, nchi) = (8, 16);
        let (x, w) = gauss_legendre(24, -1.0, 1.0);
        let norm = (((2 * j + 1) * (2 * jp + 1)) as f64).sqrt() / (8.0 * PI * PI);
        let (mut re, mut im) = (0.0, 0.0);
        for a in 0..nphi {
            let phi = 2.0 * PI * a as f64 / nphi as f64;
            for (xq, wq) in x.iter().zip(&w) {
                let th = xq.acos();
                let dd = small_d_explicit(jp, m, kp, th) * small_d_explicit(j, m, k, th);
                for c in 0..nchi {
                    let chi = 2.0 * PI * c as f64 / nchi as f64;
                    // conj(ψ') ψ: phases e^{−iMφ − iK'χ} e^{iMφ + iKχ}; the φ phases cancel (same M),
                    // but φ is still integrated over its grid.
                    let ph = 0.0 * phi + (k - kp) as f64 * chi;
                    let v = norm * wq * dd * f(th, chi) * (2.0 * PI / nphi as f64) * (2.0 * PI / nchi as f64);
                    re += v * ph.cos();
                    im += v * ph.sin();
                }
            }
        }
        (re, im)
    }

    #[test]
    fn direction_cosines_match_euler_angle_quadrature() {
        // Closed forms (products of two 3j symbols: the integral of three Wigner D functions, R. N. Zare,
        // "Angular Momentum" (Wiley 1988)) against direct quadrature over φ, θ, χ of the explicit
        // symmetric-top wavefunctions ψ = sqrt((2J+1)/8π²) e^{iMφ} d^J_{MK}(θ) e^{iKχ}, with d^J from Wigner's
        // explicit sum (checked against Edmonds in wigner::tests). Independent of the 3j code.
        type Check = (AngularOperator, fn(f64, f64) -> f64);
        let ops: [Check; 4] = [
            (AngularOperator::cos2_z(), |t, _| t.cos().powi(2)),
            (AngularOperator::cos2_x(), |t, c| (t.sin() * c.cos()).powi(2)),
            (AngularOperator::cos2_y(), |t, c| (t.sin() * c.sin()).powi(2)),
            (AngularOperator::cos_z(), |t, _| t.cos()),
        ];
        let mut checked = 0;
        for m in -2i64..=2 {
            for j in m.abs()..=4 {
                for jp in m.abs()..=4 {
                    for k in -j..=j {
                        for kp in -jp..=jp {
                            for (op, f) in &ops {
                                let (re, im) = quad(jp, kp, j, k, m, f);
                                let closed = op.element(jp, kp, j, k, m);
                                assert!((re - closed).abs() < 1e-12 && im.abs() < 1e-12, "J'={jp} K'={kp} J={j} K={k} M={m}: {re} vs {closed}");
                                checked += 1;
                            }
                        }
                    }
                }
            }
        }
        assert!(checked > 2000);
    }

    #[test]
    fn asymmetric_energies_up_to_j2_match_closed_forms() {
        // The rigid asymmetric rotor's closed-form levels for J ≤ 2 (C. H. Townes & A. L. Schawlow,
        // "Microwave Spectroscopy" (1955), asymmetric-rotor chapter; the table number is from memory):
        // J=1: B+C, A+C, A+B; J=2: 2(A+B+C) ∓ 2 sqrt((B−C)² + (A−C)(A−B)), A+B+4C, A+4B+C, 4A+B+C.
        // Recomputed independently for these (A, B, C) by diagonalizing A J_z² + B J_x² + C J_y² built from
        // the standard J = 1, 2 angular-momentum matrices with numpy (eigenvalues 0.047, 0.212, 0.215 and
        // 0.1409595, 0.303, 0.312, 0.807, 0.8070405 cm⁻¹, equal to the formulas).
        let t = top(0.19, 0.025, 0.022);
        let (a, b, c) = (t.a_cm, t.b_cm, t.c_cm);
        let root = ((b - c).powi(2) + (a - c) * (a - b)).sqrt();
        let want1 = [b + c, a + c, a + b];
        let want2 = [2.0 * (a + b + c) - 2.0 * root, a + b + 4.0 * c, a + 4.0 * b + c, 4.0 * a + b + c, 2.0 * (a + b + c) + 2.0 * root];
        for polar in [false, true] {
            for align in [BodyAxis::A, BodyAxis::B, BodyAxis::C] {
                let frame = TopFrame::new(&Top { alignment_axis: align, dipole_axis: align, ..t.clone() }, polar);
                for (j, want) in [(1i64, &want1[..]), (2, &want2[..])] {
                    let mut got: Vec<f64> = vec![];
                    for kp in 0..2 {
                        for p in [-1, 1] {
                            let blk = TopBlockBasis::new(&frame, TopBlock { m: 0, sym: TopSym::Wang { k_parity: kp, p }, j_max: j });
                            for (n, e) in blk.energies_cm.iter().enumerate() {
                                if blk.j(n) == j {
                                    got.push(*e);
                                }
                            }
                        }
                    }
                    got.sort_by(f64::total_cmp);
                    assert_eq!(got.len(), want.len());
                    for (g, w) in got.iter().zip(want) {
                        assert!((g - w).abs() < 1e-13, "frame {:?} J={j}: {g} vs {w}", frame.axes);
                    }
                }
            }
        }
    }

    #[test]
    fn symmetric_limits_of_the_asymmetric_rotor() {
        // B → C: the asymmetric machinery gives B J(J+1) + (A − B)K² (prolate symmetric top, exact formula);
        // A → B: B J(J+1) + (C − B)K² (oblate). Symmetric-top term values F(J, K) (G. Herzberg, "Molecular
        // Spectra and Molecular Structure II: Infrared and Raman Spectra of Polyatomic Molecules" (1945);
        // Townes & Schawlow, "Microwave Spectroscopy" (1955)).
        for (a, b, c, prolate) in [(5.0, 0.8 + 1e-9, 0.8, true), (0.2 + 1e-9, 0.2, 0.1, false)] {
            let t = top(a, b, c);
            assert_eq!(t.kind(), TopKind::Asymmetric);
            let frame = TopFrame::new(&t, false);
            for j in 0..=6i64 {
                let mut got: Vec<f64> = vec![];
                for kp in 0..2 {
                    for p in [-1, 1] {
                        let blk = TopBlockBasis::new(&frame, TopBlock { m: 0, sym: TopSym::Wang { k_parity: kp, p }, j_max: j });
                        got.extend((0..blk.size()).filter(|&n| blk.j(n) == j).map(|n| blk.energies_cm[n]));
                    }
                }
                got.sort_by(f64::total_cmp);
                let mut want: Vec<f64> = (-j..=j)
                    .map(|k| {
                        let (k2, x) = ((k * k) as f64, (j * (j + 1)) as f64);
                        if prolate { c * x + (a - c) * k2 } else { a * x + (c - a) * k2 }
                    })
                    .collect();
                want.sort_by(f64::total_cmp);
                for (g, w) in got.iter().zip(&want) {
                    assert!((g - w).abs() < 1e-7, "J={j}: {g} vs {w}");
                }
            }
        }
    }

    #[test]
    fn k_zero_block_of_a_symmetric_top_is_the_linear_rotor() {
        // K = 0 of a prolate top: energies B J(J+1) and the cos²θ matrix of the linear rotor, because
        // D^J_{M0}(φ, θ, χ)* = sqrt(4π/(2J+1)) Y_J^M(θ, φ) (Zare, "Angular Momentum" (1988)); the linear-rotor
        // closed forms are themselves checked against quadrature in basis::tests.
        let t = top(50.0, 0.8, 0.8);
        // Only the frame and H0 are used here, so the (non-cylindrical) test tensor does not matter.
        let frame = TopFrame::new(&t, false);
        for m in 0..3i64 {
            let blk = TopBlockBasis::new(&frame, TopBlock { m, sym: TopSym::K(0), j_max: 20 });
            let c2 = blk.operator(&AngularOperator::cos2_z());
            for n in 0..blk.size() {
                let j = blk.j(n);
                assert!((blk.energies_cm[n] - 0.8 * (j * (j + 1)) as f64).abs() < 1e-12);
                assert!((c2[(n, n)] - crate::basis::cos2_diag(j as u32, m as u32)).abs() < 1e-13);
                if n + 2 < blk.size() {
                    assert!((c2[(n, n + 2)].abs() - crate::basis::cos2_up2(j as u32, m as u32)).abs() < 1e-13);
                    assert!(c2[(n, n + 1)].abs() < 1e-14, "K = 0 has no ΔJ = 1 element");
                }
            }
        }
    }

    #[test]
    fn symmetry_labels_agree_with_the_energy_ordering() {
        // Within each J the asymmetric-rotor levels in ascending energy carry Ka = ⌊(i+1)/2⌋ and
        // Kc = J − ⌊i/2⌋ (the standard J_{Ka Kc} labelling by correlation with the prolate and oblate limits:
        // within one J the levels are ordered by τ = Ka − Kc at any asymmetry; W. Gordy & R. L. Cook, "Microwave Molecular Spectra",
        // asymmetric-rotor chapter). The block labels
        // derived from the two-fold rotations must give the same parities in every frame.
        let t = top(0.19, 0.025, 0.022);
        for z in [BodyAxis::A, BodyAxis::B, BodyAxis::C] {
            let frame = TopFrame::new(&Top { alignment_axis: z, ..t.clone() }, false);
            assert_eq!(frame.axes[0], z);
            for j in 0..=8i64 {
                let mut levels: Vec<(f64, (u32, u32))> = vec![];
                for kp in 0..2 {
                    for p in [-1, 1] {
                        let sym = TopSym::Wang { k_parity: kp, p };
                        let blk = TopBlockBasis::new(&frame, TopBlock { m: 0, sym, j_max: j });
                        let par = sym.ka_kc_parity(&frame).unwrap();
                        levels.extend((0..blk.size()).filter(|&n| blk.j(n) == j).map(|n| (blk.energies_cm[n], par)));
                    }
                }
                levels.sort_by(|x, y| x.0.total_cmp(&y.0));
                assert_eq!(levels.len() as i64, 2 * j + 1);
                // Levels closer than 1e-10 cm⁻¹ (high-Ka doublets) cannot be ordered numerically: compare
                // the labels of each such group as a set.
                let mut i = 0;
                while i < levels.len() {
                    let mut end = i + 1;
                    while end < levels.len() && levels[end].0 - levels[end - 1].0 < 1e-10 {
                        end += 1;
                    }
                    let mut got: Vec<(i64, i64)> = levels[i..end].iter().map(|l| (l.1.0 as i64, l.1.1 as i64)).collect();
                    let mut want: Vec<(i64, i64)> = (i..end).map(|n| (((n as i64 + 1) / 2) % 2, (j - n as i64 / 2) % 2)).collect();
                    got.sort_unstable();
                    want.sort_unstable();
                    assert_eq!(got, want, "frame z={z:?} J={j} levels {i}..{end}");
                    i = end;
                }
            }
        }
    }

    #[test]
    fn j1_level_a_plus_b_is_the_c_axis_direction_cosine() {
        // The J = 1 level with energy A + B has J_c ψ = 0, so ψ(M = 0) = √3 Φ_Zc. Then
        // ⟨Φ_Zc²⟩ = 3⟨Φ⁴⟩ = 3/5 and ⟨Φ_Za²⟩ = ⟨Φ_Zb²⟩ = 3⟨Φ_Zc² Φ_Za²⟩ = 1/5 (isotropic averages
        // over the unit sphere ⟨n_z⁴⟩ = ½∫_{−1}^{1} x⁴ dx = 1/5 and ⟨n_z² n_x²⟩ = ½⟨n_z²(1 − n_z²)⟩ =
        // ½(1/3 − 1/5) = 1/15: exact integrals, derived here). Fixes the relative phase of H0 and the
        // direction cosines.
        let t = top(0.19, 0.025, 0.022);
        let frame = TopFrame::new(&t, false);
        let mut found = false;
        for kp in 0..2 {
            for p in [-1, 1] {
                let blk = TopBlockBasis::new(&frame, TopBlock { m: 0, sym: TopSym::Wang { k_parity: kp, p }, j_max: 3 });
                for n in 0..blk.size() {
                    if blk.j(n) == 1 && (blk.energies_cm[n] - (t.a_cm + t.b_cm)).abs() < 1e-12 {
                        let c2: Vec<f64> =
                            (0..3).map(|i| blk.operator(&AngularOperator::cos2_position(frame.position(BodyAxis::from_index(i))))[(n, n)]).collect();
                        assert!((c2[2] - 0.6).abs() < 1e-13 && (c2[0] - 0.2).abs() < 1e-13 && (c2[1] - 0.2).abs() < 1e-13, "{c2:?}");
                        found = true;
                    }
                }
            }
        }
        assert!(found);
    }

    #[test]
    fn wang_blocks_split_the_k_parity_block_exactly() {
        // The four-block split must be exact: every operator in the split (H0, Φ_Zi²) has no element between
        // functions of opposite P, while cosθ has only such elements (it flips P). Checked numerically.
        let t = top(0.19, 0.025, 0.022);
        let frame = TopFrame::new(&t, false);
        for m in [0i64, 1, 3] {
            let j_max = 7;
            let plus: Vec<Vec<BasisFunction>> = (0..2).map(|kp| TopBlock { m, sym: TopSym::Wang { k_parity: kp, p: 1 }, j_max }.functions()).collect();
            let minus: Vec<Vec<BasisFunction>> = (0..2).map(|kp| TopBlock { m, sym: TopSym::Wang { k_parity: kp, p: -1 }, j_max }.functions()).collect();
            for kp in 0..2 {
                for f in &plus[kp] {
                    for g in &minus[kp] {
                        for op in [AngularOperator::cos2_z(), AngularOperator::cos2_x(), AngularOperator::cos2_y()] {
                            let v = pair_element(f, g, |k1, k2| op.element(f.j, k1, g.j, k2, m));
                            assert!(v.abs() < 1e-14, "{f:?} {g:?}: {v}");
                        }
                        if f.j == g.j {
                            assert!(pair_element(f, g, |k1, k2| frame.h0(f.j, k1, k2)).abs() < 1e-14);
                        }
                    }
                    for g in &plus[kp] {
                        let v = pair_element(f, g, |k1, k2| AngularOperator::cos_z().element(f.j, k1, g.j, k2, m));
                        assert!(v.abs() < 1e-14, "cosθ keeps P: {f:?} {g:?}: {v}");
                    }
                }
            }
        }
    }

    #[test]
    fn abs_direction_cosines_match_brute_force_quadrature() {
        // |Φ_Zi| by the θ quadrature plus exact χ Fourier coefficients, against brute-force quadrature over
        // θ and χ split at the kinks (Gauss–Legendre on each smooth piece), for every frame position.
        let t = top(0.19, 0.025, 0.022);
        let frame = TopFrame::new(&t, true);
        let m = 1;
        for (pos, f) in
            [(0usize, (|t: f64, _c: f64| t.cos().abs()) as fn(f64, f64) -> f64), (1, |t, c| (t.sin() * c.cos()).abs()), (2, |t, c| (t.sin() * c.sin()).abs())]
        {
            let blk = TopBlockBasis::new(&frame, TopBlock { m, sym: TopSym::KParity(0), j_max: 4 });
            let fm = {
                let e = blk.abs_direction_cosine(pos);
                // back to the function basis: U E Uᵀ, assembled per J.
                let n = blk.size();
                let mut u = DMatrix::zeros(n, n);
                for (r, &(_, s, len)) in blk.j_ranges.iter().enumerate() {
                    u.view_mut((s, s), (len, len)).copy_from(&blk.vectors[r]);
                }
                &u * e * u.transpose()
            };
            let (xt, wt) = gauss_legendre(40, 0.0, PI / 2.0);
            // Smooth pieces in χ: between the zeros of cosχ (position 1) or of sinχ (position 2).
            let (xc, wc) = if pos == 2 { gauss_legendre(40, 0.0, PI) } else { gauss_legendre(40, -PI / 2.0, PI / 2.0) };
            for (a, fa) in blk.functions.iter().enumerate() {
                for (b, fb) in blk.functions.iter().enumerate() {
                    let norm = (((2 * fa.j + 1) * (2 * fb.j + 1)) as f64).sqrt() / (8.0 * PI * PI) * 2.0 * PI;
                    let mut s = 0.0;
                    for half in [0.0, PI / 2.0] {
                        for (tq, twq) in xt.iter().zip(&wt) {
                            let th = tq + half;
                            let dd = small_d_explicit(fa.j, m, fa.k, th) * small_d_explicit(fb.j, m, fb.k, th);
                            for shift in [0.0, PI] {
                                for (cq, cwq) in xc.iter().zip(&wc) {
                                    let chi = cq + shift;
                                    s += twq * cwq * th.sin() * dd * f(th, chi) * ((fb.k - fa.k) as f64 * chi).cos();
                                }
                            }
                        }
                    }
                    assert!((norm * s - fm[(a, b)]).abs() < 1e-11, "pos {pos} {fa:?} {fb:?}: {} vs {}", norm * s, fm[(a, b)]);
                }
            }
        }
    }

    #[test]
    fn symmetric_top_first_order_stark_shift() {
        // Weak static field: E = E0 − μE K M / (J(J+1)) to first order, the first-order Stark effect of a
        // symmetric top (Townes & Schawlow, "Microwave Spectroscopy" (1955), Stark-effect chapter; Gordy &
        // Cook, "Microwave Molecular Spectra"), i.e. the diagonal ⟨J K M|cosθ|J K M⟩ = K M / J(J+1).
        let t = Top { d_j_cm: 0.0, ..top(5.1, 0.85, 0.85) };
        let frame = TopFrame::new(&t, true);
        let mu_e = 1e-5; // cm⁻¹, far below the level spacings
        for (k, m) in [(1i64, 1i64), (2, 1), (3, -2), (1, -1)] {
            let blk = TopBlockBasis::new(&frame, TopBlock { m, sym: TopSym::K(k), j_max: 12 });
            let c = blk.operator(&AngularOperator::cos_z());
            let mut h = DMatrix::from_diagonal(&nalgebra::DVector::from_vec(blk.energies_cm.clone()));
            h -= mu_e * &c;
            let (vals, _) = sorted_eigen(h);
            for (n, val) in vals.iter().enumerate().take(4) {
                let j = blk.j(n) as f64;
                let want = blk.energies_cm[n] - mu_e * (k * m) as f64 / (j * (j + 1.0));
                assert!((val - want).abs() < 1e-9 * mu_e.max(1e-12) * 1e4, "K={k} M={m} J={j}: {val} vs {want}");
            }
        }
    }
}
