//! Quantum numbers, block decomposition and matrix elements of the linear rotor in |J M⟩.
//!
//! A field polarized along Z conserves M, and cos²θ keeps the parity of J, so the problem splits
//! into independent (|M|, parity) blocks. Inside a block the states are J = j_min, j_min + 2, ….

pub mod detector;
pub mod lab;
pub mod legendre;
pub mod top;
pub mod wigner;

use crate::molecule::LinearRotor;
use crate::units::cm_to_rad_per_ps;
use nalgebra::DMatrix;

/// One (|M|, parity of J) block with `size` states J = j_min + 2n, n = 0..size; or, when parity is
/// `BOTH_PARITIES` (fields that break the parity of J, such as a static field), all J = |M|, |M| + 1, ….
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Block {
    /// |M|, the conserved projection on the field axis.
    pub m: u32,
    /// Parity of J (0 even, 1 odd), or `BOTH_PARITIES`.
    pub parity: u32,
    /// Number of basis states kept.
    pub size: usize,
}

/// The symmetry that labels a block (or an all-M chunk) of a run in reports.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum BlockSymmetry {
    /// A linear molecule's block of one parity of J (0 even, 1 odd).
    JParity(u32),
    /// Every J (fields that break the parity of J).
    EveryJ,
    /// A symmetric top's block of fixed K.
    K(i64),
    /// A symmetric top's block of fixed K and signed M (orienting fields).
    KM(i64, i64),
    /// An asymmetric top's Wang block: the parities of Ka and Kc (0 even, 1 odd).
    KaKc(i64, i64),
    /// A block of one parity of K (0 even, 1 odd).
    KParity(i64),
    /// An M = 0 block of one parity of K and one sign under the reflection through a plane containing Z.
    KParityReflection(i64, i64),
    /// A block of every J and M with one sign under the reflection through the XZ plane (fields in
    /// that plane that are not symmetric about one axis: a tilted static field).
    ReflectionXZ(i64),
    /// A top's block of every J and M with one class of K (a parity, or ±K of a symmetric top) and one
    /// sign under the reflection through the XZ plane combined with the body reflection that keeps the
    /// dipole axis (a tilted static field).
    KReflectionXZ {
        /// The class of K.
        class: Box<BlockSymmetry>,
        /// +1 or −1.
        sigma: i64,
    },
    /// An all-M chunk: its level class, its sign under the two-fold rotation about Y, and the parity of
    /// M when the fields conserve it.
    AllM {
        /// The level class.
        class: Box<BlockSymmetry>,
        /// +1 or −1.
        c2y: i64,
        /// 0 even, 1 odd; None when M parity is not conserved.
        m_parity: Option<i64>,
    },
}

impl BlockSymmetry {
    /// The label of a top's symmetry class `sym` in `frame`.
    pub fn of_top_class(sym: top::TopSym, frame: &top::TopFrame) -> BlockSymmetry {
        match sym {
            top::TopSym::K(k) => BlockSymmetry::K(k),
            top::TopSym::Wang { .. } => {
                let (a, c) = sym.ka_kc_parity(frame).expect("a Wang class has Ka and Kc parities");
                BlockSymmetry::KaKc(a as i64, c as i64)
            }
            top::TopSym::KParity(p) => BlockSymmetry::KParity(p),
            top::TopSym::Reflection { k_parity, sigma } => BlockSymmetry::KParityReflection(k_parity, sigma),
        }
    }
}

impl std::fmt::Display for BlockSymmetry {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let parity = |p: i64| ["even", "odd"][p.rem_euclid(2) as usize];
        match self {
            BlockSymmetry::JParity(p) => write!(f, "{}", parity(*p as i64)),
            BlockSymmetry::EveryJ => write!(f, "both"),
            BlockSymmetry::K(k) => write!(f, "K={k}"),
            BlockSymmetry::KM(k, m) => write!(f, "K={k}, M={m}"),
            BlockSymmetry::KaKc(a, c) => write!(f, "Ka {}, Kc {}", parity(*a), parity(*c)),
            BlockSymmetry::KParity(p) => write!(f, "K {}", parity(*p)),
            BlockSymmetry::KParityReflection(p, sigma) => write!(f, "K {}, reflection {}", parity(*p), if *sigma > 0 { "+1" } else { "-1" }),
            BlockSymmetry::ReflectionXZ(sigma) => write!(f, "every J and M, reflection XZ {sigma:+}"),
            BlockSymmetry::KReflectionXZ { class, sigma } => write!(f, "{class}, every J and M, reflection XZ {sigma:+}"),
            BlockSymmetry::AllM { class, c2y, m_parity } => {
                match class.as_ref() {
                    BlockSymmetry::JParity(p) => write!(f, "J {}", parity(*p as i64))?,
                    other => write!(f, "{other}")?,
                }
                write!(f, ", C2(Y) {c2y:+}")?;
                match m_parity {
                    Some(p) => write!(f, ", M {}", parity(*p)),
                    None => Ok(()),
                }
            }
        }
    }
}

impl serde::Serialize for BlockSymmetry {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}

/// `Block::parity` value of a block that holds every J (parity not conserved).
pub const BOTH_PARITIES: u32 = 2;

impl Block {
    /// Lowest J of the block: the smallest J ≥ |M| with the block's parity.
    pub fn j_min(&self) -> u32 {
        if self.parity == BOTH_PARITIES || self.m % 2 == self.parity { self.m } else { self.m + 1 }
    }

    /// Spacing of J between neighbouring basis states (2 within a parity, 1 with both parities).
    pub fn j_step(&self) -> u32 {
        if self.parity == BOTH_PARITIES { 1 } else { 2 }
    }

    /// J of basis index n.
    pub fn j(&self, n: usize) -> u32 {
        self.j_min() + self.j_step() * n as u32
    }

    /// Highest J kept.
    pub fn j_max(&self) -> u32 {
        self.j(self.size - 1)
    }

    /// Number of states needed for the block to reach at least `j_top`.
    pub fn size_to_reach(m: u32, parity: u32, j_top: u32) -> usize {
        let b = Block { m, parity, size: 1 };
        if j_top < b.j_min() { 1 } else { ((j_top - b.j_min()) / b.j_step() + 1) as usize }
    }

    /// Degeneracy factor of the block: 1 for M = 0, 2 for |M| > 0 (±M blocks are identical).
    pub fn m_degeneracy(&self) -> f64 {
        if self.m == 0 { 1.0 } else { 2.0 }
    }

    /// Field-free angular frequencies ω_n = E_J / ħ in rad/ps.
    pub fn frequencies(&self, mol: &LinearRotor) -> Vec<f64> {
        (0..self.size).map(|n| cm_to_rad_per_ps(mol.energy_cm(self.j(n)))).collect()
    }

    /// Matrix of a function f(cosθ) between the block's states, by Gauss–Legendre quadrature on
    /// [−1, 0] and [0, 1] separately: exact (to rounding) for polynomials and for |cosθ|.
    pub fn matrix_of(&self, f: impl Fn(f64) -> f64, extra_degree: u32) -> DMatrix<f64> {
        let n = self.size;
        let j_max = self.j_max();
        // Integrand degree ≤ 2 j_max + extra_degree on each half: n_q ≥ j_max + extra/2 + 1 points.
        let nq = (j_max + extra_degree / 2 + 2) as usize;
        let mut out = DMatrix::zeros(n, n);
        for (lo, hi) in [(-1.0, 0.0), (0.0, 1.0)] {
            let (x, w) = crate::quadrature::gauss_legendre(nq, lo, hi);
            let mut phi = DMatrix::zeros(n, nq);
            let mut scaled = DMatrix::zeros(n, nq);
            for q in 0..nq {
                let th = legendre::theta_normalized(self.m, j_max, x[q]);
                let fw = w[q] * f(x[q]);
                for i in 0..n {
                    let v = th[(self.j(i) - self.m) as usize];
                    phi[(i, q)] = v;
                    scaled[(i, q)] = v * fw;
                }
            }
            out += &scaled * phi.transpose();
        }
        out
    }

    /// The cos²θ matrix of the block as (diagonal, first off-diagonal); tridiagonal because ΔJ = 0, ±2.
    /// Only for single-parity blocks.
    pub fn cos2_tridiagonal(&self) -> (Vec<f64>, Vec<f64>) {
        debug_assert!(self.parity != BOTH_PARITIES);
        let d = (0..self.size).map(|n| cos2_diag(self.j(n), self.m)).collect();
        let e = (0..self.size.saturating_sub(1)).map(|n| cos2_up2(self.j(n), self.m)).collect();
        (d, e)
    }

    /// The cos²θ matrix of the block as a dense symmetric matrix.
    pub fn cos2_dense(&self) -> DMatrix<f64> {
        let (d, e) = self.cos2_tridiagonal();
        let mut a = DMatrix::zeros(self.size, self.size);
        for n in 0..self.size {
            a[(n, n)] = d[n];
            if n + 1 < self.size {
                a[(n, n + 1)] = e[n];
                a[(n + 1, n)] = e[n];
            }
        }
        a
    }

    /// The |cosθ| matrix of the block (dense), by Gauss–Legendre quadrature over x = cosθ ∈ [0, 1]
    /// that is exact for these polynomial integrands. ⟨|cosθ|⟩ equals ⟨cos²θ_2D⟩ for an ensemble
    /// symmetric about Z.
    pub fn abscos_dense(&self) -> DMatrix<f64> {
        let n = self.size;
        let j_max = self.j_max();
        // Integrand x Θ_J Θ_J' has degree ≤ 2 j_max + 1: n_q ≥ j_max + 1 points are exact.
        let nq = j_max as usize + 2;
        let (x, w) = crate::quadrature::gauss_legendre(nq, 0.0, 1.0);
        let mut phi = DMatrix::zeros(n, nq);
        for q in 0..nq {
            let th = legendre::theta_normalized(self.m, j_max, x[q]);
            for i in 0..n {
                phi[(i, q)] = th[(self.j(i) - self.m) as usize];
            }
        }
        let mut scaled = phi.clone();
        for q in 0..nq {
            // The integrand is even in x, so ∫_{-1}^{1} |x| … = 2 ∫_0^1 x …
            let f = 2.0 * w[q] * x[q];
            for i in 0..n {
                scaled[(i, q)] *= f;
            }
        }
        &scaled * phi.transpose()
    }
}

/// ⟨J M|cos²θ|J M⟩ = 1/3 + (2/3)[J(J+1) − 3M²] / [(2J − 1)(2J + 3)].
pub fn cos2_diag(j: u32, m: u32) -> f64 {
    let (j, m) = (j as f64, m as f64);
    1.0 / 3.0 + 2.0 / 3.0 * (j * (j + 1.0) - 3.0 * m * m) / ((2.0 * j - 1.0) * (2.0 * j + 3.0))
}

/// ⟨J+2 M|cos²θ|J M⟩ = sqrt{[(J+1)² − M²][(J+2)² − M²]} / [(2J + 3) sqrt{(2J + 1)(2J + 5)}].
pub fn cos2_up2(j: u32, m: u32) -> f64 {
    let (j, m) = (j as f64, m as f64);
    (((j + 1.0).powi(2) - m * m) * ((j + 2.0).powi(2) - m * m)).sqrt() / ((2.0 * j + 3.0) * ((2.0 * j + 1.0) * (2.0 * j + 5.0)).sqrt())
}

/// ⟨J+1 M|cosθ|J M⟩ = sqrt{[(J+1)² − M²] / [(2J + 1)(2J + 3)]}.
pub fn cos_up1(j: u32, m: u32) -> f64 {
    let (j, m) = (j as f64, m as f64);
    (((j + 1.0).powi(2) - m * m) / ((2.0 * j + 1.0) * (2.0 * j + 3.0))).sqrt()
}

#[cfg(test)]
mod tests {
    use super::legendre::theta_normalized;
    use super::*;
    use crate::quadrature::gauss_legendre;

    /// Matrix element ⟨J M|f(x)|J' M⟩ by direct Gauss–Legendre quadrature of normalized spherical harmonics.
    fn quad(j: u32, jp: u32, m: u32, f: impl Fn(f64) -> f64, nq: usize) -> f64 {
        let (x, w) = gauss_legendre(nq, -1.0, 1.0);
        let top = j.max(jp);
        x.iter()
            .zip(&w)
            .map(|(&xi, &wi)| {
                let t = theta_normalized(m, top, xi);
                wi * t[(j - m) as usize] * f(xi) * t[(jp - m) as usize]
            })
            .sum()
    }

    #[test]
    fn cos2_closed_form_matches_quadrature() {
        // The closed forms of cosθ and cos²θ between |J M⟩ (R. N. Zare, "Angular Momentum" (Wiley 1988):
        // integrals of three spherical harmonics; equivalently the Legendre recurrence
        // (2J+1) x P_J^M = (J−M+1) P_{J+1}^M + (J+M) P_{J−1}^M, Abramowitz & Stegun §8.5) against direct
        // Gauss–Legendre quadrature of the normalized Θ_J^M (orthonormality checked in legendre::tests).
        for m in 0..6u32 {
            for j in m..(m + 25) {
                let q = quad(j, j, m, |x| x * x, 40);
                assert!((q - cos2_diag(j, m)).abs() < 1e-13, "diag j={j} m={m}");
                let q2 = quad(j + 2, j, m, |x| x * x, 40);
                assert!((q2 - cos2_up2(j, m)).abs() < 1e-13, "off j={j} m={m}");
                let q1 = quad(j + 1, j, m, |x| x, 40);
                assert!((q1 - cos_up1(j, m)).abs() < 1e-13, "cos j={j} m={m}");
                // ΔJ = 4 vanishes for cos²θ.
                assert!(quad(j + 4, j, m, |x| x * x, 40).abs() < 1e-13);
            }
        }
    }

    #[test]
    fn abscos_by_hand_and_by_fine_quadrature() {
        // By hand (exact integrals, derived here): with Θ_00 = 1/√2 and Θ_20 = √(5/2)·(3x² − 1)/2,
        // ⟨00| |cosθ| |00⟩ = ½∫_{−1}^{1}|x| dx = 1/2 and
        // ⟨00| |cosθ| |20⟩ = (√5/2)·2∫_0^1 x(3x² − 1)/2 dx = (√5/2)(3/4 − 1/2) = √5/8.
        let b = Block { m: 0, parity: 0, size: 12 };
        let a = b.abscos_dense();
        assert!((a[(0, 0)] - 0.5).abs() < 1e-14);
        assert!((a[(0, 1)] - 5f64.sqrt() / 8.0).abs() < 1e-14);
        // Against brute-force quadrature with the kink resolved (split at 0, many points).
        for m in [0u32, 1, 4] {
            for parity in [0u32, 1] {
                let b = Block { m, parity, size: 10 };
                let a = b.abscos_dense();
                for i in 0..b.size {
                    for k in 0..b.size {
                        let (j, jp) = (b.j(i), b.j(k));
                        let top = j.max(jp);
                        let mut s = 0.0;
                        for (lo, hi) in [(-1.0, 0.0), (0.0, 1.0)] {
                            let (x, w) = gauss_legendre(60, lo, hi);
                            for q in 0..x.len() {
                                let t = theta_normalized(m, top, x[q]);
                                s += w[q] * x[q].abs() * t[(j - m) as usize] * t[(jp - m) as usize];
                            }
                        }
                        assert!((a[(i, k)] - s).abs() < 1e-12, "m={m} p={parity} {j},{jp}");
                    }
                }
            }
        }
    }

    #[test]
    fn isotropic_sums() {
        // Σ_M ⟨J M|cos²θ|J M⟩ = (2J+1)/3: a full M multiplet is isotropic, Σ_M |Y_J^M|² = (2J+1)/4π
        // (Unsöld's theorem, the addition theorem of spherical harmonics at zero angle; Zare, "Angular
        // Momentum" (1988)), so the sum is (2J+1)·⟨cos²θ⟩_sphere = (2J+1)/3. Exact.
        for j in 0..30u32 {
            let s: f64 = (0..=j).map(|m| if m == 0 { 1.0 } else { 2.0 } * cos2_diag(j, m)).sum();
            assert!((s - (2 * j + 1) as f64 / 3.0).abs() < 1e-12);
        }
    }

    #[test]
    fn quadrature_matrices_match_closed_forms_in_both_parity_blocks() {
        // cosθ couples J ± 1 and cos²θ J, J ± 2 (closed forms above, checked against independent quadrature
        // in cos2_closed_form_matches_quadrature; Zare, "Angular Momentum" (1988)); cos³θ by quadrature
        // equals the product of the cosθ matrix with cos²θ where the basis is complete (away from the top
        // row): an exact identity of matrix representations, not an outside value.
        let b = Block { m: 2, parity: BOTH_PARITIES, size: 20 };
        assert_eq!(b.j(0), 2);
        assert_eq!(b.j(3), 5);
        let c1 = b.matrix_of(|x| x, 1);
        let c2 = b.matrix_of(|x| x * x, 2);
        let c3 = b.matrix_of(|x| x * x * x, 3);
        for i in 0..b.size {
            for k in 0..b.size {
                let (j, jk) = (b.j(i), b.j(k));
                let want1 = if jk == j + 1 {
                    cos_up1(j, 2)
                } else if j == jk + 1 {
                    cos_up1(jk, 2)
                } else {
                    0.0
                };
                assert!((c1[(i, k)] - want1).abs() < 1e-13, "cos {j} {jk}");
                let want2 = if j == jk {
                    cos2_diag(j, 2)
                } else if jk == j + 2 {
                    cos2_up2(j, 2)
                } else if j == jk + 2 {
                    cos2_up2(jk, 2)
                } else {
                    0.0
                };
                assert!((c2[(i, k)] - want2).abs() < 1e-13, "cos2 {j} {jk}");
            }
        }
        let prod = &c1 * &c2;
        for i in 0..b.size - 3 {
            for k in 0..b.size - 3 {
                assert!((prod[(i, k)] - c3[(i, k)]).abs() < 1e-13);
            }
        }
    }

    #[test]
    fn block_indexing() {
        let b = Block { m: 3, parity: 0, size: 5 };
        assert_eq!(b.j_min(), 4);
        assert_eq!(b.j_max(), 12);
        assert_eq!(Block::size_to_reach(3, 1, 9), 4);
    }
}
