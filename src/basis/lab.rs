//! Orientation functions with lab-frame components other than Z, for fields that are not symmetric
//! about Z (three-dimensional alignment: elliptical or tilted polarizations). They couple states of
//! different M, so their matrix elements are taken between symmetric-top functions |J K M⟩ of any M
//! (linear molecules are the K = 0 case). Groundwork for the all-M solver.

use super::wigner::three_j;
use num_complex::Complex64;

/// A lab-frame axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LabAxis {
    /// X (in the polarization plane, across the beam).
    X,
    /// Y (the propagation direction).
    Y,
    /// Z (the reference polarization direction).
    Z,
}

/// Spherical components a(−1), a(0), a(+1) of a Cartesian unit vector (x, y, z) = (0, 1, 2), such that a
/// direction cosine is Φ_Fg = Σ_pq a_F(p) conj(a_g(q)) D¹_pq(Ω)* (checked by quadrature in the tests).
fn spherical(axis: usize) -> [Complex64; 3] {
    let h = std::f64::consts::FRAC_1_SQRT_2;
    let z = Complex64::new(0.0, 0.0);
    match axis {
        0 => [Complex64::new(h, 0.0), z, Complex64::new(-h, 0.0)],
        1 => [Complex64::new(0.0, h), z, Complex64::new(0.0, h)],
        _ => [z, Complex64::new(1.0, 0.0), z],
    }
}

/// c₀ + Σ c·D^r_pq(Ω)* with complex coefficients: a function of the orientation Ω = (φ, θ, χ).
#[derive(Debug, Clone, PartialEq)]
pub struct LabOperator {
    /// Coefficient of the identity.
    pub identity: f64,
    /// (rank r, lab component p, body component q, coefficient).
    pub terms: Vec<(i64, i64, i64, Complex64)>,
}

impl LabOperator {
    /// The direction cosine Φ_Fg between lab axis `lab` and the body axis at frame position `body`
    /// (0 = z, 1 = x, 2 = y of the quantization frame).
    pub fn direction_cosine(lab: LabAxis, body: usize) -> LabOperator {
        let a = spherical(match lab {
            LabAxis::X => 0,
            LabAxis::Y => 1,
            LabAxis::Z => 2,
        });
        let b = spherical(match body {
            0 => 2,
            1 => 0,
            _ => 1,
        });
        let mut terms = vec![];
        for p in -1i64..=1 {
            for q in -1i64..=1 {
                let c = a[(p + 1) as usize] * b[(q + 1) as usize].conj();
                if c.norm() > 0.0 {
                    terms.push((1, p, q, c));
                }
            }
        }
        LabOperator { identity: 0.0, terms }
    }

    /// Highest rank of the terms.
    pub fn rank(&self) -> i64 {
        self.terms.iter().map(|t| t.0).max().unwrap_or(0)
    }

    /// ⟨J' K' M'|O|J K M⟩ between primitive symmetric-top functions ψ = sqrt((2J+1)/8π²) D^J_MK(Ω)*:
    /// ⟨J'K'M'|D^r_pq*|JKM⟩ = sqrt((2J+1)(2J'+1)) (−1)^(p−q+M−K) (J' r J; M' −p −M)(J' r J; K' −q −K).
    pub fn element(&self, bra: (i64, i64, i64), ket: (i64, i64, i64)) -> Complex64 {
        let ((jp, kp, mp), (j, k, m)) = (bra, ket);
        let mut v = Complex64::new(if bra == ket { self.identity } else { 0.0 }, 0.0);
        for &(r, p, q, c) in &self.terms {
            if mp != m + p || kp != k + q || (jp - j).abs() > r {
                continue;
            }
            let a = three_j(jp, r, j, mp, -p, -m);
            if a == 0.0 {
                continue;
            }
            let b = three_j(jp, r, j, kp, -q, -k);
            let phase = if (p - q + m - k).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
            v += c * (phase * (((2 * j + 1) * (2 * jp + 1)) as f64).sqrt() * a * b);
        }
        v
    }
}

/// ⟨J'K'M'|O₁ O₂|JKM⟩ for two operators, summed over the complete set of intermediate states the
/// ranks allow (exact: |J'' − J| ≤ rank of O₂).
pub fn product_element(o1: &LabOperator, o2: &LabOperator, bra: (i64, i64, i64), ket: (i64, i64, i64)) -> Complex64 {
    let (j, k, m) = ket;
    let r = o2.rank();
    let mut v = Complex64::new(0.0, 0.0);
    for jm in (j - r).max(0)..=(j + r) {
        for km in -jm..=jm {
            for mm in -jm..=jm {
                let right = o2.element((jm, km, mm), ket);
                if right.norm() == 0.0 {
                    continue;
                }
                v += o1.element(bra, (jm, km, mm)) * right;
            }
        }
    }
    let _ = (k, m);
    v
}

/// Clebsch–Gordan coefficient ⟨j1 m1 j2 m2|j m⟩ from the 3j symbol (Condon–Shortley phases).
pub fn clebsch_gordan(j1: i64, m1: i64, j2: i64, m2: i64, j: i64, m: i64) -> f64 {
    let phase = if (j1 - j2 + m).rem_euclid(2) == 0 { 1.0 } else { -1.0 };
    phase * ((2 * j + 1) as f64).sqrt() * three_j(j1, j2, j, m1, m2, -m)
}

/// Spherical coefficients of the product of two rank-1 tensors with components u(p), v(p):
/// Σ_{p+p'=P} u(p) v(p') ⟨1 p 1 p'|r P⟩, indexed [r][P + 2] for r = 0, 1, 2.
fn couple(u: [Complex64; 3], v: [Complex64; 3]) -> [[Complex64; 5]; 3] {
    let mut out = [[Complex64::new(0.0, 0.0); 5]; 3];
    for (r, row) in out.iter_mut().enumerate() {
        for p in -1i64..=1 {
            for pp in -1i64..=1 {
                let big = p + pp;
                if big.abs() > r as i64 {
                    continue;
                }
                row[(big + 2) as usize] += u[(p + 1) as usize] * v[(pp + 1) as usize] * clebsch_gordan(1, p, 1, pp, r as i64, big);
            }
        }
    }
    out
}

/// Lab-frame factor of Φ_{F₁g} Φ_{F₂g}: with [`body_square`] it gives
/// Φ_{F₁g} Φ_{F₂g} = Σ_r Σ_{P,Q} `lab[r][P+2]` · `body[r][Q+2]` · D^r_PQ(Ω)* (Clebsch–Gordan series).
pub fn lab_pair(f1: LabAxis, f2: LabAxis) -> [[Complex64; 5]; 3] {
    let idx = |f: LabAxis| match f {
        LabAxis::X => 0,
        LabAxis::Y => 1,
        LabAxis::Z => 2,
    };
    couple(spherical(idx(f1)), spherical(idx(f2)))
}

/// Body-frame factor of Φ_{Fg}² for the body axis at frame position `body` (0 = z, 1 = x, 2 = y); see [`lab_pair`].
pub fn body_square(body: usize) -> [[Complex64; 5]; 3] {
    let b = spherical(match body {
        0 => 2,
        1 => 0,
        _ => 1,
    });
    let c = [b[0].conj(), b[1].conj(), b[2].conj()];
    couple(c, c)
}

/// The operator Σ_r Σ_{P,Q} `lab[r][P+2]` `body[r][Q+2]` D^r_PQ* as a [`LabOperator`].
pub fn factored_operator(lab: &[[Complex64; 5]; 3], body: &[[Complex64; 5]; 3]) -> LabOperator {
    let mut op = LabOperator { identity: 0.0, terms: vec![] };
    for (r, (lr, br)) in lab.iter().zip(body).enumerate() {
        for (p, lv) in lr.iter().enumerate() {
            for (q, bv) in br.iter().enumerate() {
                let c = lv * bv;
                if c.norm() < 1e-15 {
                    continue;
                }
                if r == 0 {
                    op.identity += c.re;
                } else {
                    op.terms.push((r as i64, p as i64 - 2, q as i64 - 2, c));
                }
            }
        }
    }
    op
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::basis::wigner::small_d_explicit;
    use crate::quadrature::gauss_legendre;
    use std::f64::consts::PI;

    /// The rotation matrix R(φ, θ, χ) = R_z(φ) R_y(θ) R_z(χ) (z-y-z Euler angles, active): column g is
    /// body axis g (x, y, z) in lab coordinates, so Φ_Fg = R[F][g] (textbook, e.g. Zare, "Angular
    /// Momentum", eq. 3.37).
    fn rotation(phi: f64, th: f64, chi: f64) -> [[f64; 3]; 3] {
        let (sp, cp) = phi.sin_cos();
        let (st, ct) = th.sin_cos();
        let (sc, cc) = chi.sin_cos();
        [[cp * ct * cc - sp * sc, -cp * ct * sc - sp * cc, cp * st], [sp * ct * cc + cp * sc, -sp * ct * sc + cp * cc, sp * st], [-st * cc, st * sc, ct]]
    }

    /// ⟨J'K'M'|f|JKM⟩ by quadrature over all three Euler angles of ψ = sqrt((2J+1)/8π²) e^{iMφ} d^J_MK(θ)
    /// e^{iKχ}: uniform grids in φ and χ (exact for these trigonometric polynomials), Gauss–Legendre in cosθ.
    fn quad(bra: (i64, i64, i64), ket: (i64, i64, i64), f: impl Fn(f64, f64, f64) -> f64) -> Complex64 {
        let ((jp, kp, mp), (j, k, m)) = (bra, ket);
        let n_ang = 16;
        let (x, w) = gauss_legendre(24, -1.0, 1.0);
        let norm = (((2 * j + 1) * (2 * jp + 1)) as f64).sqrt() / (8.0 * PI * PI);
        let step = 2.0 * PI / n_ang as f64;
        let mut v = Complex64::new(0.0, 0.0);
        for a in 0..n_ang {
            let phi = step * a as f64;
            for (xq, wq) in x.iter().zip(&w) {
                let th = xq.acos();
                let dd = small_d_explicit(jp, mp, kp, th) * small_d_explicit(j, m, k, th);
                for c in 0..n_ang {
                    let chi = step * c as f64;
                    let ph = (m - mp) as f64 * phi + (k - kp) as f64 * chi;
                    v += Complex64::from_polar(norm * wq * dd * f(phi, th, chi) * step * step, ph);
                }
            }
        }
        v
    }

    fn states(j_max: i64) -> Vec<(i64, i64, i64)> {
        let mut out = vec![];
        for j in 0..=j_max {
            for k in -j..=j {
                for m in -j..=j {
                    out.push((j, k, m));
                }
            }
        }
        out
    }

    #[test]
    fn direction_cosines_of_every_lab_and_body_axis_match_euler_angle_quadrature() {
        // Closed forms (3j products) against quadrature of the explicit rotation matrix elements, for
        // all nine direction cosines between states up to J = 2 of every K and M (ΔM = 0, ±1).
        let s = states(2);
        let mut checked = 0;
        for (fi, lab) in [LabAxis::X, LabAxis::Y, LabAxis::Z].into_iter().enumerate() {
            for (body, col) in [(0usize, 2usize), (1, 0), (2, 1)] {
                let op = LabOperator::direction_cosine(lab, body);
                for &bra in &s {
                    for &ket in &s {
                        let want = quad(bra, ket, |p, t, c| rotation(p, t, c)[fi][col]);
                        let got = op.element(bra, ket);
                        assert!((got - want).norm() < 1e-12, "Φ_{lab:?},{body} {bra:?} {ket:?}: {got} vs {want}");
                        checked += 1;
                    }
                }
            }
        }
        assert!(checked > 5000);
    }

    #[test]
    fn rank_decomposition_of_squared_cosines_matches_the_product_over_intermediate_states() {
        // The Clebsch–Gordan series (lab ⊗ body factors) against the explicit sum over intermediate
        // states, itself checked against Euler-angle quadrature above; all lab pairs in the XZ plane
        // and Y, every body axis, states up to J = 3.
        let s = states(3);
        let pairs = [(LabAxis::Z, LabAxis::Z), (LabAxis::X, LabAxis::X), (LabAxis::Y, LabAxis::Y), (LabAxis::X, LabAxis::Z)];
        for (f1, f2) in pairs {
            for body in 0..3 {
                let op = factored_operator(&lab_pair(f1, f2), &body_square(body));
                let (a, b) = (LabOperator::direction_cosine(f1, body), LabOperator::direction_cosine(f2, body));
                for &bra in &s {
                    for &ket in &s {
                        let want = product_element(&a, &b, bra, ket);
                        let got = op.element(bra, ket);
                        assert!((got - want).norm() < 1e-12, "{f1:?}{f2:?} body {body} {bra:?} {ket:?}: {got} vs {want}");
                    }
                }
            }
        }
        // Textbook values: ⟨1 1 1 −1|0 0⟩ = 1/√3, ⟨1 1 1 0|2 1⟩ = 1/√2, ⟨1 0 1 0|2 0⟩ = √(2/3) (Condon–Shortley).
        assert!((clebsch_gordan(1, 1, 1, -1, 0, 0) - 1.0 / 3f64.sqrt()).abs() < 1e-15);
        assert!((clebsch_gordan(1, 1, 1, 0, 2, 1) - 0.5f64.sqrt()).abs() < 1e-15);
        assert!((clebsch_gordan(1, 0, 1, 0, 2, 0) - (2.0f64 / 3.0).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn products_of_direction_cosines_match_quadrature_and_sum_to_one() {
        // Φ_Xz², Φ_Xz Φ_Zz and Φ_Yx Φ_Zy (couplings of tilted and elliptical fields) by summation over
        // intermediate states, against quadrature; and Σ_F Φ_Fz² = 1 (orthonormal rows) as a matrix.
        let s = states(2);
        let z = |lab| LabOperator::direction_cosine(lab, 0);
        type Product = (LabOperator, LabOperator, fn([[f64; 3]; 3]) -> f64);
        let pairs: [Product; 3] = [
            (z(LabAxis::X), z(LabAxis::X), |r| r[0][2] * r[0][2]),
            (z(LabAxis::X), z(LabAxis::Z), |r| r[0][2] * r[2][2]),
            (LabOperator::direction_cosine(LabAxis::Y, 1), LabOperator::direction_cosine(LabAxis::Z, 2), |r| r[1][0] * r[2][1]),
        ];
        for (a, b, f) in &pairs {
            for &bra in &s {
                for &ket in &s {
                    let want = quad(bra, ket, |p, t, c| f(rotation(p, t, c)));
                    let got = product_element(a, b, bra, ket);
                    assert!((got - want).norm() < 1e-12, "{bra:?} {ket:?}: {got} vs {want}");
                }
            }
        }
        for &bra in &s {
            for &ket in &s {
                let sum: Complex64 = [LabAxis::X, LabAxis::Y, LabAxis::Z].iter().map(|&l| product_element(&z(l), &z(l), bra, ket)).sum();
                let want = if bra == ket { 1.0 } else { 0.0 };
                assert!((sum - want).norm() < 1e-12, "{bra:?} {ket:?}: {sum}");
            }
        }
    }
}

/// The polarization of a pulse travelling along Y: the major axis of the field ellipse lies in the XZ
/// plane at `angle_rad` from Z towards X, and the minor axis, also in that plane, carries `ellipticity`
/// times the major field (0 linear, 1 circular).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Polarization {
    /// Angle of the major axis from Z towards X, rad.
    pub angle_rad: f64,
    /// Ratio of minor to major field amplitude, 0..=1.
    pub ellipticity: f64,
}

impl Polarization {
    /// Linear polarization along Z.
    pub const Z: Polarization = Polarization { angle_rad: 0.0, ellipticity: 0.0 };

    /// The cycle-averaged coupling of a body axis with this field, normalized to the intensity:
    /// [(ê₁·n)² + ε²(ê₂·n)²] / (1 + ε²) for the body axis n at frame position `body`, with ê₁ the major
    /// and ê₂ the minor axis. Its spectrum lies in [0, 1]; for Z polarization it is cos²θ.
    /// Returned as weights of the products Φ_F Φ_F' over lab axes (X, Z), to be combined with
    /// [`product_element`].
    pub fn coupling_weights(&self) -> [(LabAxis, LabAxis, f64); 4] {
        let (s, c) = self.angle_rad.sin_cos();
        let e2 = self.ellipticity * self.ellipticity;
        let norm = 1.0 / (1.0 + e2);
        // ê₁ = (sin β, 0, cos β), ê₂ = (cos β, 0, −sin β): (ê·n)² = e_X² n_X² + e_Z² n_Z² + 2 e_X e_Z n_X n_Z.
        let zz = (c * c + e2 * s * s) * norm;
        let xx = (s * s + e2 * c * c) * norm;
        let xz = (1.0 - e2) * s * c * norm;
        [(LabAxis::Z, LabAxis::Z, zz), (LabAxis::X, LabAxis::X, xx), (LabAxis::X, LabAxis::Z, xz), (LabAxis::Z, LabAxis::X, xz)]
    }

    /// ⟨J'K'M'|coupling|JKM⟩ for the body axis at frame position `body` (see [`Polarization::coupling_weights`]).
    pub fn coupling_element(&self, body: usize, bra: (i64, i64, i64), ket: (i64, i64, i64)) -> Complex64 {
        self.coupling_weights()
            .iter()
            .filter(|w| w.2 != 0.0)
            .map(|&(f1, f2, w)| w * product_element(&LabOperator::direction_cosine(f1, body), &LabOperator::direction_cosine(f2, body), bra, ket))
            .sum()
    }
}

/// ⟨J' K M'|cos²θ_2D|J K M⟩ for the projection of the frame z axis onto the detector plane XZ (beam along
/// Y): cos²θ_2D = n_Z²/(n_Z² + n_X²) = cos²ψ, with ψ the azimuth of the axis about Y. It depends on the
/// axis direction only, so K is kept, and it is not a finite-rank tensor (it couples every J and every
/// even ΔM). Integrated over the axis direction in coordinates about Y, where the integrand is smooth:
/// Gauss–Legendre in cos ϑ_Y (`nodes` points) and a uniform grid in ψ (2·`nodes` points).
pub fn detector_plane_cos2(bra: (i64, i64, i64), ket: (i64, i64, i64), nodes: usize) -> Complex64 {
    use std::f64::consts::PI;
    let ((jp, kp, mp), (j, k, m)) = (bra, ket);
    if kp != k {
        return Complex64::new(0.0, 0.0);
    }
    let (x, w) = crate::quadrature::gauss_legendre(nodes, -1.0, 1.0);
    let n_psi = 2 * nodes;
    // ∫dχ ψ*_bra ψ_ket = 2π · sqrt((2J+1)(2J'+1))/(8π²) · e^{i(M' − M)φ}·… with ψ = sqrt((2J+1)/8π²) e^{iMφ} d^J_MK(θ) e^{iKχ}.
    let norm = 2.0 * PI * (((2 * j + 1) * (2 * jp + 1)) as f64).sqrt() / (8.0 * PI * PI);
    let mut v = Complex64::new(0.0, 0.0);
    for (cy, wy) in x.iter().zip(&w) {
        let sy = (1.0 - cy * cy).max(0.0).sqrt();
        for q in 0..n_psi {
            let psi = 2.0 * PI * (q as f64 + 0.5) / n_psi as f64;
            let (nx, ny, nz) = (sy * psi.sin(), *cy, sy * psi.cos());
            let (theta, phi) = (nz.clamp(-1.0, 1.0).acos(), ny.atan2(nx));
            let f = psi.cos().powi(2);
            let d = small_d(jp, mp, k, theta) * small_d(j, m, k, theta);
            v += Complex64::from_polar(norm * wy * (2.0 * PI / n_psi as f64) * f * d, (m - mp) as f64 * phi);
        }
    }
    v
}

/// Wigner small d by the explicit sum (used for checks and quadrature).
fn small_d(j: i64, mp: i64, m: i64, beta: f64) -> f64 {
    super::wigner::small_d_explicit(j, mp, m, beta)
}

#[cfg(test)]
mod polarization_tests {
    use super::*;
    use crate::basis::Block;
    use nalgebra::DMatrix;

    /// All |J 0 M⟩ (linear molecule) with J ≤ j_max of one parity, as (J, K, M).
    fn linear_states(parity: i64, j_max: i64) -> Vec<(i64, i64, i64)> {
        (0..=j_max).filter(|j| j % 2 == parity).flat_map(|j| (-j..=j).map(move |m| (j, 0, m))).collect()
    }

    /// The coupling matrix of `pol` for a linear molecule on `states` (real: the field lies in the XZ plane).
    fn coupling_matrix(pol: Polarization, states: &[(i64, i64, i64)]) -> DMatrix<f64> {
        let n = states.len();
        DMatrix::from_fn(n, n, |a, b| {
            let v = pol.coupling_element(0, states[a], states[b]);
            assert!(v.im.abs() < 1e-14, "coupling of a field in the XZ plane is real");
            v.re
        })
    }

    #[test]
    fn z_polarization_reproduces_the_m_conserving_cos2_matrix() {
        // Reference: the closed-form tridiagonal cos²θ of the M-conserving blocks (checked elsewhere
        // against quadrature), element by element.
        let states = linear_states(0, 6);
        let a = coupling_matrix(Polarization::Z, &states);
        for m in 0..=6i64 {
            let block = Block { m: m as u32, parity: 0, size: Block::size_to_reach(m as u32, 0, 6) };
            let dense = block.cos2_dense();
            let idx = |j: i64| states.iter().position(|s| *s == (j, 0, m)).expect("state");
            for r in 0..block.size {
                for c in 0..block.size {
                    let (jr, jc) = (block.j(r) as i64, block.j(c) as i64);
                    assert!((a[(idx(jr), idx(jc))] - dense[(r, c)]).abs() < 1e-13);
                }
            }
        }
        // and nothing couples different M.
        for (i, si) in states.iter().enumerate() {
            for (j, sj) in states.iter().enumerate() {
                if si.2 != sj.2 {
                    assert_eq!(a[(i, j)], 0.0);
                }
            }
        }
    }

    #[test]
    fn detector_plane_operator_is_one_half_on_average_and_reduces_to_abs_cos_for_fixed_m() {
        // (Groundwork: the all-M solver does not evaluate this operator yet; see DEVELOPERS §10.)
        // Exact limits: summed over M (an isotropic level) ⟨cos²θ_2D⟩ = 1/2, the mean of cos²ψ; between
        // states of equal M the φ average of cos²θ/(cos²θ + sin²θ cos²φ) is |cosθ| (closed form), so those
        // elements equal the M-conserving ⟨|cosθ|⟩ matrix (Gauss–Legendre on each half of θ, checked
        // elsewhere). Linear molecule (K = 0) and a top's K = 1 and 2.
        for k in [0i64, 1, 2] {
            for j in k.max(0)..=5 {
                let mut trace = Complex64::new(0.0, 0.0);
                for m in -j..=j {
                    trace += detector_plane_cos2((j, k, m), (j, k, m), 48);
                }
                let mean = trace / (2 * j + 1) as f64;
                assert!((mean.re - 0.5).abs() < 1e-12 && mean.im.abs() < 1e-12, "K = {k}, J = {j}: {mean}");
            }
        }
        let frame = crate::basis::top::TopFrame {
            axes: [crate::molecule::top::BodyAxis::A, crate::molecule::top::BodyAxis::B, crate::molecule::top::BodyAxis::C],
            az: 1.0,
            bx: 0.5,
            by: 0.5,
            distortion: [0.0; 3],
            symmetric: true,
        };
        for (k, m) in [(0i64, 0i64), (0, 1), (1, 1), (2, -1)] {
            let basis = crate::basis::top::TopBlockBasis::new(&frame, crate::basis::top::TopBlock { m, sym: crate::basis::top::TopSym::K(k), j_max: 7 });
            let abs = basis.abs_direction_cosine(0);
            for r in 0..basis.size() {
                for c in 0..basis.size() {
                    let got = detector_plane_cos2((basis.j(r), k, m), (basis.j(c), k, m), 64);
                    assert!((got.re - abs[(r, c)]).abs() < 1e-10 && got.im.abs() < 1e-12, "K {k} M {m} ({r}, {c}): {got} vs {}", abs[(r, c)]);
                }
            }
        }
    }

    #[test]
    fn rotating_the_polarization_keeps_the_spectrum_and_circular_light_is_an_average() {
        // Exact limits: on a space closed under rotations (all M of each J) a rotated field has the same
        // eigenvalues; the coupling of circular light is the mean of the X and Z couplings; every
        // coupling is a weighted mean of squared direction cosines, so its spectrum lies in [0, 1].
        let states = linear_states(1, 7);
        let eig = |p: Polarization| {
            let mut v: Vec<f64> = coupling_matrix(p, &states).symmetric_eigenvalues().iter().copied().collect();
            v.sort_by(f64::total_cmp);
            v
        };
        let z = eig(Polarization::Z);
        for angle in [0.3, std::f64::consts::FRAC_PI_2, 2.0] {
            let rotated = eig(Polarization { angle_rad: angle, ellipticity: 0.0 });
            for (a, b) in z.iter().zip(&rotated) {
                assert!((a - b).abs() < 1e-12, "angle {angle}: {a} vs {b}");
            }
        }
        let circ = coupling_matrix(Polarization { angle_rad: 0.4, ellipticity: 1.0 }, &states);
        let mean = 0.5
            * (coupling_matrix(Polarization::Z, &states) + coupling_matrix(Polarization { angle_rad: std::f64::consts::FRAC_PI_2, ellipticity: 0.0 }, &states));
        assert!((circ - mean).abs().max() < 1e-13);
        for e in [0.0, 0.5, 1.0] {
            let v = eig(Polarization { angle_rad: 0.7, ellipticity: e });
            assert!(v[0] > -1e-12 && *v.last().expect("eigenvalues") < 1.0 + 1e-12);
        }
    }
}
