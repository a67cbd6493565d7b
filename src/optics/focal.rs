//! Focal-volume averaging: molecules across the pump focus feel different intensities, and the probe
//! detects them with a weight that falls off across its own focus. For Gaussian pump and probe beams
//! (1/e² intensity radii w and w_p) and a probe signal ∝ I_probe^n, with u = I/I0 = exp(−2r²/w²):
//! ⟨O⟩ = a ∫₀¹ O(I0 u) u^(a−1) du, a = n w²/w_p²; with s = −a ln u this is ∫₀^∞ O(I0 e^(−s/a)) e^(−s) ds,
//! evaluated by Gauss–Laguerre quadrature (smooth integrand for any a).

use crate::error::{Error, Result, require_positive};
use nalgebra::{DMatrix, SymmetricEigen};
use serde::{Deserialize, Serialize};

/// Transverse focal averaging of pump and probe Gaussian beams (the molecular sample is taken as thin
/// compared with the Rayleigh range).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct FocalAverage {
    /// Pump 1/e² intensity radius at the focus, µm.
    pub pump_waist_um: f64,
    /// Probe 1/e² intensity radius at the focus, µm.
    pub probe_waist_um: f64,
    /// Order n of the probe process (signal ∝ I_probe^n), ≥ 1.
    #[serde(default = "default_order")]
    pub probe_order: f64,
    /// Quadrature points over the intensity distribution.
    #[serde(default = "default_points")]
    pub points: usize,
}

fn default_order() -> f64 {
    1.0
}

fn default_points() -> usize {
    20
}

impl FocalAverage {
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
        Ok(())
    }

    /// The exponent a = n w²/w_p².
    pub fn exponent(&self) -> f64 {
        self.probe_order * (self.pump_waist_um / self.probe_waist_um).powi(2)
    }

    /// (intensity fraction u_k, weight w_k) with Σ w_k = 1: ⟨O⟩ ≈ Σ w_k O(I0 u_k).
    pub fn nodes(&self) -> Vec<(f64, f64)> {
        let a = self.exponent();
        gauss_laguerre(self.points).into_iter().map(|(s, w)| ((-s / a).exp(), w)).collect()
    }
}

/// Gauss–Laguerre nodes and weights (∫₀^∞ f(s) e^(−s) ds ≈ Σ w f(s)) by the Golub–Welsch method.
fn gauss_laguerre(n: usize) -> Vec<(f64, f64)> {
    let mut j = DMatrix::zeros(n, n);
    for i in 0..n {
        j[(i, i)] = (2 * i + 1) as f64;
        if i + 1 < n {
            j[(i, i + 1)] = (i + 1) as f64;
            j[(i + 1, i)] = (i + 1) as f64;
        }
    }
    let e = SymmetricEigen::new(j);
    let mut out: Vec<(f64, f64)> = (0..n).map(|k| (e.eigenvalues[k], e.eigenvectors[(0, k)].powi(2))).collect();
    out.sort_by(|x, y| x.0.total_cmp(&y.0));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn averages_of_powers_are_exact() {
        // For O(I) = (I/I0)^k the average is a/(a + k) (integral of a u^(a+k−1)); exact calculus.
        let f = FocalAverage { pump_waist_um: 50.0, probe_waist_um: 30.0, probe_order: 2.0, points: 16 };
        let a = f.exponent();
        for k in [1.0, 2.0, 3.0] {
            let s: f64 = f.nodes().iter().map(|(u, w)| w * u.powf(k)).sum();
            assert!((s - a / (a + k)).abs() < 1e-9, "k={k}: {s} vs {}", a / (a + k));
        }
        // The widest probe accepted (a = 1/2) is still integrated accurately with the default points.
        let wide = FocalAverage { probe_waist_um: 100.0, points: 20, ..f };
        assert!((wide.exponent() - 0.5).abs() < 1e-12);
        wide.validate("f").unwrap();
        let s: f64 = wide.nodes().iter().map(|(u, w)| w * u).sum();
        assert!((s - 1.0 / 3.0).abs() < 1e-5, "{s}");
        assert!(FocalAverage { probe_waist_um: 200.0, ..f }.validate("f").is_err());
        let total: f64 = f.nodes().iter().map(|n| n.1).sum();
        assert!((total - 1.0).abs() < 1e-14);
    }
}
