//! The detector-plane alignment ⟨cos²θ_2D⟩ with its full azimuthal dependence, for ensembles that are
//! not symmetric about Z (pulses polarized away from Z).
//!
//! With the beam (and the imaging axis) along Y and the detector in the XZ plane, an axis at azimuth ψ
//! about Y (measured from Z towards X) projects at angle ψ from Z, so cos²θ_2D = cos²ψ = ½ + ½ Re e^{2iψ}.
//! Quantized along Y, e^{2iψ} of the frame z axis is e^{2iφ'} (φ' the first Euler angle about Y): it raises
//! M_Y by two, keeps K, and is a plain θ integral between rotor functions. For an axis perpendicular to
//! the K axis of a symmetric top (K conserved, so only the χ average matters) the same holds with the
//! weight H(θ) = −(1 − |cosθ|)/(1 + |cosθ|), the exact average of e^{2iψ}e^{−2iφ'} over χ.
//! States change from Z to Y quantization by one (2J+1)-square matrix per J that acts on M alone.

use super::wigner::small_d_series;
use crate::quadrature::gauss_legendre;
use nalgebra::DMatrix;
use rayon::prelude::*;

/// Change of quantization axis from Z to the beam axis Y: for each J ≤ `j_max`, the complex matrix U
/// (rows M_Y + J, columns M + J) with c_{M_Y} = Σ_M U[M_Y, M] c_M for the amplitudes of one |J K⟩.
/// U = d^J(π/2) e^{−iMπ/2}: the rotation with Euler angles (0, π/2, π/2) takes the frame (Z, X, Y) to
/// (X, Y, Z), and rotor functions transform as D^{J*}. Returned as (Re U, Im U) per J.
pub fn beam_quantization(j_max: i64) -> Vec<(DMatrix<f64>, DMatrix<f64>)> {
    let half_pi = std::f64::consts::FRAC_PI_2;
    let mut out: Vec<(DMatrix<f64>, DMatrix<f64>)> =
        (0..=j_max).map(|j| (DMatrix::zeros((2 * j + 1) as usize, (2 * j + 1) as usize), DMatrix::zeros((2 * j + 1) as usize, (2 * j + 1) as usize))).collect();
    for my in -j_max..=j_max {
        for m in -j_max..=j_max {
            let d = small_d_series(my, m, half_pi, j_max);
            let (s, c) = (-(m as f64) * half_pi).sin_cos();
            for j in my.abs().max(m.abs())..=j_max {
                let (re, im) = &mut out[j as usize];
                let (r, col) = ((my + j) as usize, (m + j) as usize);
                re[(r, col)] = d[j as usize] * c;
                im[(r, col)] = d[j as usize] * s;
            }
        }
    }
    out
}

/// Which axis of the rotor the detector-plane operator follows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum DetectorAxis {
    /// The frame z axis (the K axis): linear molecules, asymmetric tops, prolate tops aligned along a.
    FrameZ,
    /// An axis perpendicular to the K axis of a symmetric top, averaged over the rotation about K.
    Perpendicular,
}

impl DetectorAxis {
    /// The θ weight of ⟨J' K M+2| e^{2iψ} |J K M⟩ at cosθ = x.
    fn weight(self, x: f64) -> f64 {
        match self {
            DetectorAxis::FrameZ => 1.0,
            DetectorAxis::Perpendicular => -(1.0 - x.abs()) / (1.0 + x.abs()),
        }
    }
}

/// θ integrals of the detector-plane operator in the Y-quantized basis:
/// ⟨J' K M+2| e^{2iψ} |J K M⟩_Y = ½ sqrt((2J+1)(2J'+1)) ∫ d^{J'}_{M+2,K}(θ) d^J_{MK}(θ) w(θ) sinθ dθ,
/// for K ≥ 0 (negative K from ⟨…−K…⟩ = (−1)^{J+J'} ⟨…K…⟩, since w(π − θ) = w(θ)).
#[derive(Debug)]
pub struct DetectorTable {
    /// Largest J covered.
    pub j_max: i64,
    /// The axis followed.
    pub axis: DetectorAxis,
    /// Per (K ≥ 0 listed, M + j_max): rows J' from max(|M+2|, K), columns J from max(|M|, K).
    entries: Vec<Vec<Option<DMatrix<f64>>>>,
    ks: Vec<i64>,
}

impl DetectorTable {
    /// The integrals for every |K| in `ks` and J, J' ≤ `j_max`, by Gauss–Legendre quadrature in cosθ on
    /// [−1, 0] and [0, 1] (exact for the frame z axis: the integrand is a polynomial of degree ≤ 2 j_max;
    /// the perpendicular axis's weight is analytic on each half).
    pub fn new(ks: &[i64], j_max: i64, axis: DetectorAxis) -> DetectorTable {
        let mut ks: Vec<i64> = ks.iter().map(|k| k.abs()).filter(|k| *k <= j_max).collect();
        ks.sort_unstable();
        ks.dedup();
        let nq = (j_max + 8) as usize;
        let mut nodes = vec![];
        for (lo, hi) in [(-1.0, 0.0), (0.0, 1.0)] {
            let (x, w) = gauss_legendre(nq, lo, hi);
            for (xq, wq) in x.into_iter().zip(w) {
                nodes.push((xq.clamp(-1.0, 1.0).acos(), wq * axis.weight(xq)));
            }
        }
        let entries = ks
            .par_iter()
            .map(|&k| {
                let j_of = |m: i64| m.abs().max(k);
                // d^J_{MK}(θ_q) for J = j_of(M)..=j_max (rows) at every node (columns), per M.
                let d: Vec<DMatrix<f64>> = (-j_max..=j_max)
                    .map(|m| {
                        let lo = j_of(m);
                        let mut t = DMatrix::zeros((j_max - lo + 1).max(0) as usize, nodes.len());
                        for (q, &(th, _)) in nodes.iter().enumerate() {
                            let s = small_d_series(m, k, th, j_max);
                            for j in lo..=j_max {
                                t[((j - lo) as usize, q)] = s[j as usize];
                            }
                        }
                        t
                    })
                    .collect();
                (-j_max..=j_max)
                    .map(|m| {
                        if m + 2 > j_max || j_of(m) > j_max || j_of(m + 2) > j_max {
                            return None;
                        }
                        let (a, b) = (&d[(m + j_max) as usize], &d[(m + 2 + j_max) as usize]);
                        let mut aw = a.clone();
                        for (q, &(_, w)) in nodes.iter().enumerate() {
                            aw.column_mut(q).scale_mut(w);
                        }
                        let mut t = b * aw.transpose();
                        let (lo_b, lo_a) = (j_of(m + 2), j_of(m));
                        for r in 0..t.nrows() {
                            for c in 0..t.ncols() {
                                let (jp, j) = (lo_b + r as i64, lo_a + c as i64);
                                t[(r, c)] *= 0.5 * (((2 * j + 1) * (2 * jp + 1)) as f64).sqrt();
                            }
                        }
                        Some(t)
                    })
                    .collect()
            })
            .collect();
        DetectorTable { j_max, axis, entries, ks }
    }

    /// ⟨J' K M+2| e^{2iψ} |J K M⟩ in the Y-quantized basis (0 outside the table or for J, J' < |M|, |K|).
    pub fn element(&self, jp: i64, j: i64, k: i64, m: i64) -> f64 {
        let Ok(slot) = self.ks.binary_search(&k.abs()) else { return 0.0 };
        if m < -self.j_max || m > self.j_max || jp > self.j_max || j > self.j_max {
            return 0.0;
        }
        let Some(t) = &self.entries[slot][(m + self.j_max) as usize] else { return 0.0 };
        let (lo_b, lo_a) = ((m + 2).abs().max(k.abs()), m.abs().max(k.abs()));
        if jp < lo_b || j < lo_a {
            return 0.0;
        }
        let v = t[((jp - lo_b) as usize, (j - lo_a) as usize)];
        if k < 0 && (j + jp) % 2 != 0 { -v } else { v }
    }

    /// The integrals for |K| = `k` at M_Y = `m`: (matrix, first J' of its rows, first J of its columns).
    pub fn matrix(&self, k: i64, m: i64) -> Option<(&DMatrix<f64>, i64, i64)> {
        let slot = self.ks.binary_search(&k.abs()).ok()?;
        if m < -self.j_max || m > self.j_max {
            return None;
        }
        let t = self.entries[slot][(m + self.j_max) as usize].as_ref()?;
        Some((t, (m + 2).abs().max(k.abs()), m.abs().max(k.abs())))
    }

    /// Bytes held.
    pub fn bytes(&self) -> usize {
        self.entries.iter().flatten().flatten().map(|t| 8 * t.len()).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::basis::lab::detector_plane_cos2;
    use num_complex::Complex64;

    #[test]
    fn beam_quantized_operator_matches_quadrature_in_the_z_basis() {
        // Reference: `detector_plane_cos2`, the cos²ψ operator between Z-quantized |J K M⟩ by direct
        // quadrature over the orientation (independent of the change of axis and of the θ table).
        // Here the operator is rebuilt from the Y-quantized table as ½ + ¼(D + D†) and rotated back.
        let j_max = 4;
        let ks: Vec<i64> = (0..=2).collect();
        let table = DetectorTable::new(&ks, j_max, DetectorAxis::FrameZ);
        let u = beam_quantization(j_max);
        let ucx = |j: i64, my: i64, m: i64| {
            let (re, im) = &u[j as usize];
            Complex64::new(re[((my + j) as usize, (m + j) as usize)], im[((my + j) as usize, (m + j) as usize)])
        };
        // ⟨J' M_Y'|O|J M_Y⟩ with O = ½ + ¼(e^{2iψ} + e^{−2iψ}).
        let o_y = |jp: i64, myp: i64, j: i64, my: i64, k: i64| -> f64 {
            let mut v = if jp == j && myp == my { 0.5 } else { 0.0 };
            if myp == my + 2 {
                v += 0.25 * table.element(jp, j, k, my);
            }
            if my == myp + 2 {
                v += 0.25 * table.element(j, jp, k, myp);
            }
            v
        };
        let mut worst: f64 = 0.0;
        for k in -2..=2i64 {
            for jp in k.abs()..=j_max {
                for j in k.abs()..=j_max {
                    for mp in -jp..=jp {
                        for m in -j..=j {
                            // ⟨J' M'|_Z O |J M⟩_Z = Σ conj(U[M_Y', M']) O_Y U[M_Y, M].
                            let mut v = Complex64::new(0.0, 0.0);
                            for myp in -jp..=jp {
                                for my in -j..=j {
                                    let o = o_y(jp, myp, j, my, k);
                                    if o != 0.0 {
                                        v += ucx(jp, myp, mp).conj() * o * ucx(j, my, m);
                                    }
                                }
                            }
                            let reference = detector_plane_cos2((jp, k, mp), (j, k, m), 40);
                            worst = worst.max((v - reference).norm());
                        }
                    }
                }
            }
        }
        assert!(worst < 1e-10, "largest difference {worst}");
    }

    #[test]
    fn perpendicular_axis_weight_is_the_average_over_the_rotation_about_k() {
        // Reference: direct average over χ (trapezoid rule, exponentially accurate for this smooth periodic
        // integrand) of e^{2iψ} e^{−2iφ'} for the frame x axis, whose azimuth about Y is
        // arg(cosθ cosχ + i sinχ) + φ'.
        for &x in &[0.95, 0.6, 0.2, -0.3, -0.8] {
            let n = 4000;
            let mut acc = Complex64::new(0.0, 0.0);
            for q in 0..n {
                let chi = 2.0 * std::f64::consts::PI * q as f64 / n as f64;
                let z = Complex64::new(x * chi.cos(), chi.sin());
                acc += (z / z.norm()).powi(2);
            }
            acc /= n as f64;
            let w = DetectorAxis::Perpendicular.weight(x);
            assert!((acc.re - w).abs() < 1e-10 && acc.im.abs() < 1e-10, "cosθ = {x}: {acc} vs {w}");
        }
    }

    #[test]
    fn change_of_axis_is_unitary_for_large_j() {
        // Exact: each U^J is unitary (checks the d(π/2) recursion where explicit sums would fail).
        let u = beam_quantization(60);
        for j in [0usize, 7, 31, 60] {
            let (re, im) = &u[j];
            let n = re.nrows();
            // U U† = (Re + i Im)(Reᵀ − i Imᵀ): real part Re Reᵀ + Im Imᵀ, imaginary part Im Reᵀ − Re Imᵀ.
            let real = re * re.transpose() + im * im.transpose() - DMatrix::<f64>::identity(n, n);
            let imag = im * re.transpose() - re * im.transpose();
            assert!(real.amax() < 1e-11 && imag.amax() < 1e-11, "J = {j}: {} {}", real.amax(), imag.amax());
        }
    }
}
