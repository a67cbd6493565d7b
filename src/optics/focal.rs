//! Focal-volume averaging: molecules across the pump focus feel different intensities, and the probe
//! detects them with a weight that falls off across its own focus. For Gaussian pump and probe beams
//! (1/e² intensity radii w and w_p) and a probe signal ∝ I_probe^n, with u = I/I0 = exp(−2r²/w²):
//! ⟨O⟩ = a ∫₀¹ O(I0 u) u^(a−1) du, a = n w²/w_p²; with s = −a ln u this is ∫₀^∞ O(I0 e^(−s/a)) e^(−s) ds,
//! evaluated by Gauss–Laguerre quadrature (smooth integrand for any a).
//!
//! Along the beam (optional, `sample_length_um`): both beams are focused at the same point and the gas
//! density is uniform over a sample of length L centred on the focus. At axial position z, with
//! ζ = z/z_R and ζ_p = z/z_Rp, the pump has peak I0/(1+ζ²) and radius w(z) = w0 √(1+ζ²), the probe
//! peak I_p0/(1+ζ_p²) and radius w_p(z) = w_p0 √(1+ζ_p²). The probe signal from the slice at z is
//! ∫ 2πr dr I_p(r,z)^n O(I(r,z)) = (π w_p(z)²/2n) (I_p0/(1+ζ_p²))^n ⟨O⟩_a(z), where ⟨O⟩_a(z) is the
//! transverse average above with peak I0/(1+ζ²) and exponent a(z) = n w(z)²/w_p(z)² =
//! a0 (1+ζ²)/(1+ζ_p²). The slice weight is therefore W(z) ∝ (1+ζ_p²)^(1−n) (uniform for n = 1: the
//! probe power is the same in every slice), and ⟨O⟩ = ∫ W(z) ⟨O⟩_a(z) dz / ∫ W(z) dz over |z| ≤ L/2.
//! The whole volume is a distribution of intensity fractions u ∈ (0, 1]: it is discretised finely
//! (composite Gauss–Legendre in z on panels that widen away from the focus; Gauss–Jacobi in u for the
//! weight u^(a−1) in each slice), then condensed to a `points`-node Gauss rule for that distribution by
//! the Lanczos process (Golub & Welsch, Math. Comp. 23, 221 (1969); Gautschi, "Orthogonal
//! Polynomials: Computation and Approximation", 2004, §2.2), so an axial average costs as many runs as a
//! transverse one and is exact for polynomials in u up to degree 2·points − 1.

use crate::error::{Error, Result, require_positive};
use crate::quadrature::gauss_legendre;
use nalgebra::{DMatrix, SymmetricEigen};
use serde::{Deserialize, Serialize};

/// Focal averaging over pump and probe Gaussian beams: transverse only (thin sample), or also along the
/// beam over a sample of given length.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct FocalAverage {
    /// Pump 1/e² intensity radius at the focus, µm.
    pub pump_waist_um: f64,
    /// Probe 1/e² intensity radius at the focus, µm.
    pub probe_waist_um: f64,
    /// Order n of the probe process (signal ∝ I_probe^n), ≥ 1.
    #[serde(default = "default_order")]
    pub probe_order: f64,
    /// Quadrature points over the intensity distribution (= solver runs per average).
    #[serde(default = "default_points")]
    pub points: usize,
    /// Length of the molecular sample along the beam, centred on the focus, µm (None: thin sample).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sample_length_um: Option<f64>,
    /// Pump Rayleigh range, µm (required with `sample_length_um`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pump_rayleigh_um: Option<f64>,
    /// Probe Rayleigh range, µm (required with `sample_length_um`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub probe_rayleigh_um: Option<f64>,
}

fn default_order() -> f64 {
    1.0
}

fn default_points() -> usize {
    20
}

/// Longest sample accepted along the beam, µm (1 m).
pub const MAX_SAMPLE_LENGTH_UM: f64 = 1e6;

/// Rayleigh range z_R = π w0² / (M² λ), µm, of a Gaussian beam with 1/e² radius `waist_um` (µm),
/// wavelength `wavelength_nm` (nm) and beam quality `m2`.
pub fn rayleigh_range_um(waist_um: f64, wavelength_nm: f64, m2: f64) -> f64 {
    std::f64::consts::PI * waist_um * waist_um / (m2 * wavelength_nm * 1e-3)
}

impl FocalAverage {
    /// A transverse-only average (thin sample) with pump and probe radii in µm, probe order n and
    /// quadrature points.
    pub fn thin(pump_waist_um: f64, probe_waist_um: f64, probe_order: f64, points: usize) -> FocalAverage {
        FocalAverage { pump_waist_um, probe_waist_um, probe_order, points, sample_length_um: None, pump_rayleigh_um: None, probe_rayleigh_um: None }
    }

    /// The same average taken also along the beam over `sample_length_um` (µm), with the pump and probe
    /// Rayleigh ranges in µm.
    pub fn along_axis(self, sample_length_um: f64, pump_rayleigh_um: f64, probe_rayleigh_um: f64) -> FocalAverage {
        FocalAverage { sample_length_um: Some(sample_length_um), pump_rayleigh_um: Some(pump_rayleigh_um), probe_rayleigh_um: Some(probe_rayleigh_um), ..self }
    }

    /// Check the averaging; errors name the field under `path`.
    pub fn validate(&self, path: &str) -> Result<()> {
        require_positive(&format!("{path}.pump_waist_um"), self.pump_waist_um, "µm")?;
        require_positive(&format!("{path}.probe_waist_um"), self.probe_waist_um, "µm")?;
        if !self.probe_order.is_finite() || !(1.0..=20.0).contains(&self.probe_order) {
            return Err(Error::input(format!("{path}.probe_order"), format!("expected a probe order from 1 to 20, got {}", self.probe_order)));
        }
        if self.exponent() < 0.5 {
            return Err(Error::input(
                format!("{path}.probe_waist_um"),
                format!(
                    "a probe this much wider than the pump mostly sees molecules the pump missed; expected probe_waist_um ≤ pump_waist_um × sqrt(2 × probe_order) = {:.1} µm",
                    self.pump_waist_um * (2.0 * self.probe_order).sqrt()
                ),
            ));
        }
        if !(2..=64).contains(&self.points) {
            return Err(Error::input(format!("{path}.points"), format!("expected 2 to 64 quadrature points, got {}", self.points)));
        }
        match (self.sample_length_um, self.pump_rayleigh_um, self.probe_rayleigh_um) {
            (None, None, None) => {}
            (None, Some(_), _) => {
                return Err(Error::input(
                    format!("{path}.pump_rayleigh_um"),
                    "only used with sample_length_um; expected sample_length_um (µm) as well, or neither",
                ));
            }
            (None, None, Some(_)) => {
                return Err(Error::input(
                    format!("{path}.probe_rayleigh_um"),
                    "only used with sample_length_um; expected sample_length_um (µm) as well, or neither",
                ));
            }
            (Some(l), zr, zp) => {
                require_positive(&format!("{path}.sample_length_um"), l, "µm")?;
                if l > MAX_SAMPLE_LENGTH_UM {
                    return Err(Error::input(format!("{path}.sample_length_um"), format!("expected at most {MAX_SAMPLE_LENGTH_UM:e} µm (1 m), got {l}")));
                }
                for (key, v) in [("pump_rayleigh_um", zr), ("probe_rayleigh_um", zp)] {
                    match v {
                        None => {
                            return Err(Error::input(
                                format!("{path}.{key}"),
                                "missing; the average along the beam needs the Rayleigh range in µm (or the wavelength in nm)",
                            ));
                        }
                        Some(z) => {
                            require_positive(&format!("{path}.{key}"), z, "µm")?;
                            if z > 1e9 {
                                return Err(Error::input(format!("{path}.{key}"), format!("expected at most 1e9 µm, got {z}")));
                            }
                        }
                    }
                }
            }
        }
        Ok(())
    }

    /// The exponent a = n w²/w_p² at the focus.
    pub fn exponent(&self) -> f64 {
        self.probe_order * (self.pump_waist_um / self.probe_waist_um).powi(2)
    }

    /// (intensity fraction u_k, weight w_k) with Σ w_k = 1: ⟨O⟩ ≈ Σ w_k O(I0 u_k), I0 the peak on axis at
    /// the focus. At most `points` nodes, all with 0 < u_k ≤ 1.
    pub fn nodes(&self) -> Vec<(f64, f64)> {
        match (self.sample_length_um, self.pump_rayleigh_um, self.probe_rayleigh_um) {
            (Some(l), Some(zr), Some(zp)) => self.axial_nodes(l, zr, zp),
            _ => {
                let a = self.exponent();
                gauss_laguerre(self.points).into_iter().map(|(s, w)| ((-s / a).exp(), w)).collect()
            }
        }
    }

    /// The fine discretisation of the volume average (see the module notes): (u, weight), Σ weight = 1.
    fn axial_measure(&self, length_um: f64, pump_zr_um: f64, probe_zr_um: f64) -> Vec<(f64, f64)> {
        let half = 0.5 * length_um;
        let scale = pump_zr_um.min(probe_zr_um);
        // Panels [0, s/2], [s/2, s], [s, 2s], ... up to L/2 (the integrand is even in z).
        let mut edges = vec![0.0, (0.5 * scale).min(half)];
        while *edges.last().expect("non-empty") < half {
            let next = (2.0 * edges.last().expect("non-empty")).min(half);
            edges.push(next);
        }
        let inner_points = self.points + 4;
        let a0 = self.exponent();
        let n = self.probe_order;
        let mut out = vec![];
        let mut total = 0.0;
        for pair in edges.windows(2) {
            let (z, g) = gauss_legendre(16, pair[0], pair[1]);
            for (&z, &g) in z.iter().zip(&g) {
                let (q, qp) = (1.0 + (z / pump_zr_um).powi(2), 1.0 + (z / probe_zr_um).powi(2));
                let slice = g * qp.powf(1.0 - n);
                let a = a0 * q / qp;
                total += slice;
                for (u, w) in gauss_jacobi_power(inner_points, a) {
                    out.push((u / q, slice * w));
                }
            }
        }
        out.iter_mut().for_each(|p| p.1 /= total);
        out
    }

    fn axial_nodes(&self, length_um: f64, pump_zr_um: f64, probe_zr_um: f64) -> Vec<(f64, f64)> {
        let fine = self.axial_measure(length_um, pump_zr_um, probe_zr_um);
        let mut rule = condense(&fine, self.points);
        rule.iter_mut().for_each(|p| p.0 = p.0.clamp(f64::MIN_POSITIVE, 1.0));
        rule
    }
}

/// Gauss rule (nodes, weights summing to 1) from the recurrence coefficients of monic orthogonal
/// polynomials (diagonal `alpha`, off-diagonal `beta` = √b_k) by the Golub–Welsch eigenvalue method.
fn golub_welsch(alpha: &[f64], offdiag: &[f64]) -> Vec<(f64, f64)> {
    let n = alpha.len();
    let mut j = DMatrix::zeros(n, n);
    for i in 0..n {
        j[(i, i)] = alpha[i];
        if i + 1 < n {
            j[(i, i + 1)] = offdiag[i];
            j[(i + 1, i)] = offdiag[i];
        }
    }
    let e = SymmetricEigen::new(j);
    let mut out: Vec<(f64, f64)> = (0..n).map(|k| (e.eigenvalues[k], e.eigenvectors[(0, k)].powi(2))).collect();
    out.sort_by(|x, y| x.0.total_cmp(&y.0));
    out
}

/// Gauss–Laguerre nodes and weights (∫₀^∞ f(s) e^(−s) ds ≈ Σ w f(s)) by the Golub–Welsch method.
fn gauss_laguerre(n: usize) -> Vec<(f64, f64)> {
    let alpha: Vec<f64> = (0..n).map(|i| (2 * i + 1) as f64).collect();
    let off: Vec<f64> = (1..n).map(|i| i as f64).collect();
    golub_welsch(&alpha, &off)
}

/// Gauss rule for a ∫₀¹ f(u) u^(a−1) du (a > 0): Gauss–Jacobi with α = 0, β = a − 1 on [−1, 1], mapped by
/// u = (1 + x)/2 (recurrence coefficients as in Abramowitz & Stegun 22.7 / Gautschi 2004, Table 1.1).
fn gauss_jacobi_power(n: usize, a: f64) -> Vec<(f64, f64)> {
    let (al, be) = (0.0, a - 1.0);
    let s = al + be;
    let mut diag = vec![(be - al) / (s + 2.0)];
    for k in 1..n {
        let k = k as f64;
        diag.push((be * be - al * al) / ((2.0 * k + s) * (2.0 * k + s + 2.0)));
    }
    let mut off = vec![];
    for k in 1..n {
        let k = k as f64;
        let t = 2.0 * k + s;
        // b_1 has the factor (1 + α + β) in numerator and denominator; cancelled here.
        let b = if k == 1.0 {
            4.0 * (1.0 + al) * (1.0 + be) / ((2.0 + s).powi(2) * (3.0 + s))
        } else {
            4.0 * k * (k + al) * (k + be) * (k + s) / (t * t * (t + 1.0) * (t - 1.0))
        };
        off.push(b.sqrt());
    }
    golub_welsch(&diag, &off).into_iter().map(|(x, w)| (0.5 * (1.0 + x), w)).collect()
}

/// An `n`-node Gauss rule for the discrete distribution `fine` (points, weights summing to 1) by the
/// Lanczos process with full reorthogonalisation (fewer nodes if the distribution has fewer distinct
/// points).
fn condense(fine: &[(f64, f64)], n: usize) -> Vec<(f64, f64)> {
    let x: Vec<f64> = fine.iter().map(|p| p.0).collect();
    let mut q: Vec<Vec<f64>> = vec![fine.iter().map(|p| p.1.max(0.0).sqrt()).collect()];
    let norm = q[0].iter().map(|v| v * v).sum::<f64>().sqrt();
    q[0].iter_mut().for_each(|v| *v /= norm);
    let (mut alpha, mut off) = (vec![], vec![]);
    for j in 0..n {
        let mut v: Vec<f64> = q[j].iter().zip(&x).map(|(a, b)| a * b).collect();
        alpha.push(dot(&q[j], &v));
        for _ in 0..2 {
            for qi in &q {
                let c = dot(qi, &v);
                v.iter_mut().zip(qi).for_each(|(a, b)| *a -= c * b);
            }
        }
        if j + 1 == n {
            break;
        }
        let b = dot(&v, &v).sqrt();
        if b < 1e-13 * alpha[j].abs().max(1e-300) {
            break;
        }
        off.push(b);
        q.push(v.into_iter().map(|a| a / b).collect());
    }
    golub_welsch(&alpha, &off)
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn averages_of_powers_are_exact() {
        // For O(I) = (I/I0)^k the average is a ∫₀¹ u^(a+k−1) du = a/(a + k) (exact calculus), with the
        // intensity distribution a u^(a−1), a = n w²/w_p², derived in the module comment from the Gaussian-beam
        // profiles (here a = 2 × (50/30)² = 5.556).
        let f = FocalAverage::thin(50.0, 30.0, 2.0, 16);
        let a = f.exponent();
        for k in [1.0, 2.0, 3.0] {
            let s: f64 = f.nodes().iter().map(|(u, w)| w * u.powf(k)).sum();
            assert!((s - a / (a + k)).abs() < 1e-9, "k={k}: {s} vs {}", a / (a + k));
        }
        // The widest probe accepted (a = 2 × (50/100)² = 1/2) is still integrated accurately with the default
        // points: ⟨u⟩ = a/(a + 1) = 1/3.
        let wide = FocalAverage { probe_waist_um: 100.0, points: 20, ..f };
        assert!((wide.exponent() - 0.5).abs() < 1e-12);
        wide.validate("f").unwrap();
        let s: f64 = wide.nodes().iter().map(|(u, w)| w * u).sum();
        assert!((s - 1.0 / 3.0).abs() < 1e-5, "{s}");
        assert!(FocalAverage { probe_waist_um: 200.0, ..f }.validate("f").is_err());
        let total: f64 = f.nodes().iter().map(|n| n.1).sum();
        assert!((total - 1.0).abs() < 1e-14);
    }

    #[test]
    fn gauss_jacobi_rule_integrates_powers_exactly() {
        // a ∫₀¹ u^(a−1) u^k du = a/(a + k) (exact calculus); an n-point Gauss rule is exact to degree 2n − 1.
        for a in [0.3, 0.5, 1.0, 2.7, 11.0] {
            let rule = gauss_jacobi_power(6, a);
            for k in 0..12 {
                let s: f64 = rule.iter().map(|(u, w)| w * u.powi(k)).sum();
                let want = a / (a + k as f64);
                assert!((s - want).abs() < 1e-12, "a={a} k={k}: {s} vs {want}");
            }
        }
    }

    #[test]
    fn axial_average_of_powers_has_a_closed_form() {
        // Equal pump and probe Rayleigh ranges keep a(z) = a0, and the slice weight is (1+ζ²)^(1−n). For
        // O = I/I0 the average over |ζ| ≤ Λ is then (exact calculus, ∫dζ/(1+ζ²) = atan ζ and
        // ∫dζ/(1+ζ²)² = ζ/(2(1+ζ²)) + atan(ζ)/2):
        //   n = 1: a0/(a0+1) · atan(Λ)/Λ;
        //   n = 2: a0/(a0+1) · [Λ/(2(1+Λ²)) + atan(Λ)/2] / atan(Λ);
        // and for O = (I/I0)², n = 1: a0/(a0+2) · [Λ/(2(1+Λ²)) + atan(Λ)/2] / Λ.
        let zr = 2000.0;
        for lam in [0.05f64, 0.7, 3.0, 40.0, 200.0] {
            let one = FocalAverage::thin(50.0, 40.0, 1.0, 12).along_axis(2.0 * lam * zr, zr, zr);
            one.validate("f").unwrap();
            let a = one.exponent();
            let i2 = lam / (2.0 * (1.0 + lam * lam)) + 0.5 * lam.atan();
            let avg = |f: &FocalAverage, k: i32| -> f64 { f.nodes().iter().map(|(u, w)| w * u.powi(k)).sum() };
            let want = a / (a + 1.0) * lam.atan() / lam;
            assert!((avg(&one, 1) / want - 1.0).abs() < 1e-12, "Λ={lam}: {} vs {want}", avg(&one, 1));
            let want = a / (a + 2.0) * i2 / lam;
            assert!((avg(&one, 2) / want - 1.0).abs() < 1e-12, "Λ={lam}: {} vs {want}", avg(&one, 2));
            let two = FocalAverage { probe_order: 2.0, ..one };
            let a = two.exponent();
            let want = a / (a + 1.0) * i2 / lam.atan();
            assert!((avg(&two, 1) / want - 1.0).abs() < 1e-12, "Λ={lam}: {} vs {want}", avg(&two, 1));
        }
    }

    #[test]
    fn a_short_sample_reproduces_the_thin_average() {
        // Limit: a sample much shorter than both Rayleigh ranges sees the focal-plane intensities only, so the
        // axial average must agree with the transverse one (two different quadratures of the same integral).
        let thin = FocalAverage::thin(50.0, 30.0, 2.0, 20);
        let short = thin.along_axis(1.0, 9800.0, 4000.0);
        for f in [|u: f64| (-3.0 * u).exp(), |u: f64| u.powf(2.5), |u: f64| (5.0 * u).cos()] {
            let a: f64 = thin.nodes().iter().map(|(u, w)| w * f(*u)).sum();
            let b: f64 = short.nodes().iter().map(|(u, w)| w * f(*u)).sum();
            assert!((a - b).abs() < 2e-8, "{a} vs {b}");
        }
    }

    #[test]
    fn axial_nodes_are_a_proper_rule() {
        // Positive weights summing to one and intensity fractions in (0, 1] (properties of any Gauss rule of a
        // probability distribution on (0, 1]: nodes inside the support, positive weights; W. Gautschi,
        // "Orthogonal Polynomials: Computation and Approximation" (2004), ch. 1, Thm 1.46 (theorem number from memory)),
        // also for a very long sample.
        for (l, zr, zp, n) in [(5000.0, 2000.0, 800.0, 3.0), (9e5, 300.0, 900.0, 1.0), (10.0, 1e6, 1e6, 2.0)] {
            let f = FocalAverage::thin(40.0, 30.0, n, 24).along_axis(l, zr, zp);
            f.validate("f").unwrap();
            let nodes = f.nodes();
            assert!(nodes.len() >= 2 && nodes.len() <= 24);
            let total: f64 = nodes.iter().map(|p| p.1).sum();
            assert!((total - 1.0).abs() < 1e-12, "{total}");
            assert!(nodes.iter().all(|&(u, w)| u > 0.0 && u <= 1.0 && w > 0.0 && w.is_finite()), "{nodes:?}");
        }
    }

    #[test]
    fn bad_axial_settings_name_the_field() {
        let f = FocalAverage::thin(50.0, 30.0, 1.0, 20);
        let msg = |g: FocalAverage| g.validate("fa").unwrap_err().to_string();
        assert!(msg(f.along_axis(0.0, 1e3, 1e3)).starts_with("fa.sample_length_um:"));
        assert!(msg(f.along_axis(f64::NAN, 1e3, 1e3)).starts_with("fa.sample_length_um:"));
        assert!(msg(f.along_axis(2e6, 1e3, 1e3)).starts_with("fa.sample_length_um:"));
        assert!(msg(f.along_axis(1e3, -1.0, 1e3)).starts_with("fa.pump_rayleigh_um:"));
        assert!(msg(f.along_axis(1e3, 1e3, f64::INFINITY)).starts_with("fa.probe_rayleigh_um:"));
        assert!(msg(FocalAverage { pump_rayleigh_um: None, ..f.along_axis(1e3, 1e3, 1e3) }).starts_with("fa.pump_rayleigh_um: missing"));
        assert!(msg(FocalAverage { pump_rayleigh_um: Some(1e3), ..f }).starts_with("fa.pump_rayleigh_um: only used"));
        assert!(msg(FocalAverage { probe_rayleigh_um: Some(1e3), ..f }).starts_with("fa.probe_rayleigh_um: only used"));
    }

    #[test]
    fn rayleigh_range_worked_example() {
        // z_R = π w0²/(M² λ): w0 = 50 µm, λ = 800 nm, M² = 1 → π × 2500 µm² / 0.8 µm = 9817.48 µm, and
        // 9817.48/1.5 = 6544.98 µm for M² = 1.5 (Gaussian-beam optics, A. E. Siegman, "Lasers" (1986); worked
        // by hand).
        assert!((rayleigh_range_um(50.0, 800.0, 1.0) - 9817.48).abs() < 0.01);
        assert!((rayleigh_range_um(50.0, 800.0, 1.5) - 6544.98).abs() < 0.01);
    }
}
