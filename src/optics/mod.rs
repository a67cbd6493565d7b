//! From the optical table to the molecules: pulse energy, duration and focusing give the peak
//! intensity (Gaussian beams; temporal shape factors from the envelope area).

pub mod focal;
pub mod ionization;
pub mod report;

pub use report::{FocusReport, focus_report};

use crate::error::{Error, Result, require_positive};
use serde::{Deserialize, Serialize};

/// How a pulse's peak intensity follows from its energy and focus.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Focus {
    /// Pulse energy, mJ.
    pub energy_mj: f64,
    /// 1/e² intensity radius at the focus, µm (give this, or the input beam and lens below).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub waist_um: Option<f64>,
    /// 1/e² intensity radius of the collimated beam on the lens, mm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub beam_radius_mm: Option<f64>,
    /// Wavelength, nm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub wavelength_nm: Option<f64>,
    /// Focal length of the lens, mm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub focal_length_mm: Option<f64>,
    /// Beam quality factor M² (≥ 1).
    #[serde(default = "one", skip_serializing_if = "is_one")]
    pub m2: f64,
}

fn one() -> f64 {
    1.0
}

fn is_one(x: &f64) -> bool {
    *x == 1.0
}

impl Focus {
    /// Check the optics; errors name the field under `path`.
    pub fn validate(&self, path: &str) -> Result<()> {
        require_positive(&format!("{path}.energy_mj"), self.energy_mj, "mJ")?;
        if self.energy_mj > 1e5 {
            return Err(Error::input(format!("{path}.energy_mj"), format!("expected at most 1e5 mJ, got {}", self.energy_mj)));
        }
        if !self.m2.is_finite() || self.m2 < 1.0 {
            return Err(Error::input(format!("{path}.m2"), format!("expected a beam quality factor M² ≥ 1, got {}", self.m2)));
        }
        match (self.waist_um, self.beam_radius_mm, self.wavelength_nm, self.focal_length_mm) {
            (Some(w), None, _, None) => {
                require_positive(&format!("{path}.waist_um"), w, "µm")?;
            }
            (None, Some(r), Some(l), Some(f)) => {
                require_positive(&format!("{path}.beam_radius_mm"), r, "mm")?;
                require_positive(&format!("{path}.wavelength_nm"), l, "nm")?;
                require_positive(&format!("{path}.focal_length_mm"), f, "mm")?;
                if self.waist_m() * 1e3 >= r {
                    return Err(Error::input(
                        format!("{path}.focal_length_mm"),
                        "the focus would be larger than the beam on the lens; expected a shorter focal length or a wider beam",
                    ));
                }
            }
            _ => {
                return Err(Error::input(
                    format!("{path}.waist_um"),
                    "expected either waist_um, or beam_radius_mm with wavelength_nm and focal_length_mm (and optionally m2)",
                ));
            }
        }
        Ok(())
    }

    /// 1/e² intensity radius at the focus, m: given, or w0 = M² λ f / (π w_in) for a collimated input beam.
    pub fn waist_m(&self) -> f64 {
        match self.waist_um {
            Some(w) => w * 1e-6,
            None => {
                let (r, l, f) = (
                    self.beam_radius_mm.unwrap_or(f64::NAN) * 1e-3,
                    self.wavelength_nm.unwrap_or(f64::NAN) * 1e-9,
                    self.focal_length_mm.unwrap_or(f64::NAN) * 1e-3,
                );
                self.m2 * l * f / (std::f64::consts::PI * r)
            }
        }
    }

    /// Rayleigh range z_R = π w0² / (M² λ), mm (None without a wavelength).
    pub fn rayleigh_range_mm(&self) -> Option<f64> {
        self.wavelength_nm.map(|l| std::f64::consts::PI * self.waist_m().powi(2) / (self.m2 * l * 1e-9) * 1e3)
    }
}

/// Peak power (W) of a pulse of energy E (mJ) whose power envelope has area `envelope_area_ps`
/// (∫f dt with f(0) = 1): P = E / ∫f dt, e.g. 0.9394 E/τ for a Gaussian.
pub fn peak_power_w(energy_mj: f64, envelope_area_ps: f64) -> f64 {
    energy_mj * 1e-3 / (envelope_area_ps * 1e-12)
}

/// Peak on-axis intensity (W/cm²) of a Gaussian beam of peak power P (W) and 1/e² radius w0 (m):
/// I0 = 2P / (π w0²).
pub fn peak_intensity_wcm2(peak_power_w: f64, waist_m: f64) -> f64 {
    2.0 * peak_power_w / (std::f64::consts::PI * waist_m * waist_m) * 1e-4
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::field::{Pulse, PulseShape};

    #[test]
    fn worked_example_gaussian_and_sech2() {
        // Worked by hand from the Gaussian-beam formula I0 = 2P/(πw0²) (Siegman, "Lasers", 1986, ch. 17)
        // and the temporal shape factors P = 0.9394 E/τ (Gaussian) and 0.8814 E/τ (sech²). These are the
        // reciprocals of the envelope areas ∫f dt/τ (closed forms, derived here): Gaussian
        // sqrt(4 ln2/π) = 0.939437; sech² with τ = 2 arccosh(√2) T0, area 2 T0, so τ/(2 T0) = arccosh(√2)
        // = ln(1 + √2) = 0.881374.
        // 1 mJ, 100 fs, w0 = 50 µm → P = 9.394e9 W, I0 = 2 × 9.394e9 / (π × 2.5e-9 m²) = 2.392e18 W/m²
        // = 2.392e14 W/cm² (Gaussian); sech²: P = 8.814e9 W, I0 = 2.245e14 W/cm².
        let g = Pulse {
            center_ps: 0.0,
            fwhm_fs: 100.0,
            peak_intensity_wcm2: 1.0,
            shape: PulseShape::Gaussian,
            rise_fs: None,
            cut_fs: None,
            polarization: Default::default(),
        };
        let p = peak_power_w(1.0, g.envelope_area_ps());
        assert!((p / 9.394e9 - 1.0).abs() < 2e-4, "{p}");
        assert!((peak_intensity_wcm2(p, 50e-6) / 2.392e14 - 1.0).abs() < 5e-4);
        let s = Pulse { shape: PulseShape::Sech2, ..g };
        let p = peak_power_w(1.0, s.envelope_area_ps());
        assert!((p / 8.814e9 - 1.0).abs() < 2e-4, "{p}");
        assert!((peak_intensity_wcm2(p, 50e-6) / 2.245e14 - 1.0).abs() < 5e-4);
    }

    #[test]
    fn focusing_a_collimated_beam() {
        // w0 = M² λ f / (π w_in): 800 nm, f = 300 mm, w_in = 5 mm, M² = 1 → 8e-7 × 0.3 / (π × 5e-3) m =
        // 15.279 µm; z_R = π w0²/λ = π (15.279 µm)² / 0.8 µm = 0.9167 mm (Gaussian-beam optics, A. E. Siegman,
        // "Lasers" (1986); worked by hand).
        let f = Focus { energy_mj: 2.0, waist_um: None, beam_radius_mm: Some(5.0), wavelength_nm: Some(800.0), focal_length_mm: Some(300.0), m2: 1.0 };
        f.validate("f").unwrap();
        assert!((f.waist_m() * 1e6 - 15.279).abs() < 1e-3);
        assert!((f.rayleigh_range_mm().unwrap() - 0.9167).abs() < 1e-3);
        let bad = Focus { m2: 0.8, ..f };
        assert!(bad.validate("f").unwrap_err().to_string().starts_with("f.m2:"));
        let zero = Focus { waist_um: Some(0.0), beam_radius_mm: None, focal_length_mm: None, ..f };
        assert!(zero.validate("f").unwrap_err().to_string().starts_with("f.waist_um:"));
        let neg = Focus { energy_mj: -1.0, ..f };
        assert!(neg.validate("f").unwrap_err().to_string().starts_with("f.energy_mj:"));
    }
}
