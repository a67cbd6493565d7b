//! What a pulse energy, duration and focus amount to at the molecules: peak power, waist, intensity,
//! field and fluence, and the intensity at which one such pulse ionizes a tenth of each molecule
//! (ADK estimate), with a warning when the focus is above it (`kicktrain focus`).

use super::{Focus, ionization, peak_intensity_wcm2, peak_power_w};
use crate::error::{Error, Result};
use crate::field::{Pulse, PulseShape};
use crate::molecule::{Molecule, library, top_library};
use serde_json::{Map, Value, json};

/// Fraction ionized per pulse (ADK estimate) above which a focus report warns.
pub const IONIZED_WARNING: f64 = 0.1;

/// Peak power, focal spot and the fields at the focus of one pulse, compared with molecular ionization.
#[derive(Debug, Clone, PartialEq)]
pub struct FocusReport {
    /// The pulse energy and focusing (validated).
    pub focus: Focus,
    /// Intensity FWHM, fs.
    pub fwhm_fs: f64,
    /// Temporal shape of the envelope.
    pub shape: PulseShape,
    /// Peak power, W.
    pub peak_power_w: f64,
    /// 1/e² intensity radius at the focus, m.
    pub waist_m: f64,
    /// Rayleigh range, mm (None without a wavelength).
    pub rayleigh_range_mm: Option<f64>,
    /// Peak on-axis intensity at the focus, W/cm².
    pub peak_intensity_wcm2: f64,
    /// Peak electric field at that intensity, V/m.
    pub peak_field_v_per_m: f64,
    /// Peak on-axis fluence, J/cm².
    pub peak_fluence_j_per_cm2: f64,
    /// Each molecule compared, with the intensity (W/cm²) at which one such pulse ionizes [`IONIZED_WARNING`] of it.
    pub ionization_intensity_wcm2: Vec<(String, f64)>,
    /// Set when the peak intensity is above some of those intensities (see [`ionization_warning`]).
    pub warning: Option<String>,
}

/// The report for a pulse of `focus.energy_mj`, FWHM `fwhm_fs` and temporal `shape` ("gaussian", …) focused
/// as `focus` says, compared with the ionization of `molecule` (a library name), or of every library molecule
/// (linear and tops) that lists an ionization energy. Errors name the field at fault.
pub fn focus_report(focus: &Focus, fwhm_fs: f64, shape: &str, molecule: Option<&str>) -> Result<FocusReport> {
    focus.validate("focus")?;
    let shape = PulseShape::parse(shape).ok_or_else(|| Error::input("shape", format!("expected {}, got \"{shape}\"", PulseShape::NAMES)))?;
    let p = Pulse { center_ps: 0.0, fwhm_fs, peak_intensity_wcm2: 1.0, shape, rise_fs: None, cut_fs: None, polarization: Default::default() };
    p.validate("pulse")?;
    // The molecules whose ionization the intensity is compared with: the named one, or every library entry
    // that lists an ionization energy.
    let molecules: Vec<Molecule> = match molecule {
        Some(name) => {
            let m = Molecule::from_library(name, "molecule")?;
            if m.ionization_energy_ev.is_none() {
                return Err(Error::input(
                    "molecule",
                    format!("{} has no ionization energy in the library; name another molecule or leave --molecule out", m.name),
                ));
            }
            vec![m]
        }
        None => library().iter().map(|e| e.molecule()).chain(top_library().iter().map(|e| e.molecule())).filter(|m| m.ionization_energy_ev.is_some()).collect(),
    };
    let power = peak_power_w(focus.energy_mj, p.envelope_area_ps());
    let w0 = focus.waist_m();
    let i0 = peak_intensity_wcm2(power, w0);
    let field = crate::units::peak_field_v_per_m(i0);
    let fluence = 2.0 * focus.energy_mj * 1e-3 / (std::f64::consts::PI * (w0 * 100.0).powi(2));
    // The intensity at which one pulse of this shape and duration ionizes 10 % of each molecule (ADK).
    let pulse_at = |i: f64| Pulse { peak_intensity_wcm2: i, ..p.clone() };
    let ceilings: Vec<(String, f64)> = molecules
        .iter()
        .map(|m| (m.name.clone(), ionization::intensity_for_fraction(pulse_at, m.ionization_energy_ev.unwrap_or(f64::INFINITY), IONIZED_WARNING)))
        .collect();
    let warning = ionization_warning(i0, &ceilings);
    Ok(FocusReport {
        focus: *focus,
        fwhm_fs,
        shape,
        peak_power_w: power,
        waist_m: w0,
        rayleigh_range_mm: focus.rayleigh_range_mm(),
        peak_intensity_wcm2: i0,
        peak_field_v_per_m: field,
        peak_fluence_j_per_cm2: fluence,
        ionization_intensity_wcm2: ceilings,
        warning,
    })
}

impl FocusReport {
    /// The report as JSON, keys carrying their units.
    pub fn to_json(&self) -> Value {
        json!({
            "energy_mj": self.focus.energy_mj, "fwhm_fs": self.fwhm_fs, "shape": self.shape,
            "peak_power_w": self.peak_power_w, "waist_um": self.waist_m * 1e6, "rayleigh_range_mm": self.rayleigh_range_mm,
            "peak_intensity_wcm2": self.peak_intensity_wcm2, "peak_field_v_per_m": self.peak_field_v_per_m,
            "peak_fluence_j_per_cm2": self.peak_fluence_j_per_cm2,
            "ionization": {
                "fraction": IONIZED_WARNING,
                "method": "ADK tunnelling estimate for one pulse of this shape and duration (order of magnitude)",
                "intensity_wcm2_by_molecule": self.ionization_intensity_wcm2.iter().map(|(n, c)| (n.clone(), json!(c))).collect::<Map<_, _>>(),
            },
            "warnings": self.warning.iter().collect::<Vec<_>>(),
        })
    }
}

/// A warning when intensity `i0` (W/cm²) ionizes at least [`IONIZED_WARNING`] of some of the molecules compared;
/// `ceilings` holds each molecule's name and the intensity at which it does.
pub fn ionization_warning(i0: f64, ceilings: &[(String, f64)]) -> Option<String> {
    let over: Vec<&(String, f64)> = ceilings.iter().filter(|(_, c)| i0 > *c).collect();
    if over.is_empty() {
        return None;
    }
    let pct = IONIZED_WARNING * 100.0;
    if over.len() == 1 && ceilings.len() == 1 {
        let (n, c) = &ceilings[0];
        return Some(format!(
            "{i0:.2e} W/cm² is above {c:.2e} W/cm², where one such pulse ionizes {pct:.0} % of {n} (ADK estimate): molecules do not survive to be aligned"
        ));
    }
    let highest = ceilings.iter().max_by(|a, b| a.1.total_cmp(&b.1)).expect("not empty");
    if over.len() == ceilings.len() {
        Some(format!(
            "{i0:.2e} W/cm² is above the intensity where one such pulse ionizes {pct:.0} % of every library molecule (ADK estimate; highest {:.2e} W/cm² for {}): molecules do not survive to be aligned",
            highest.1, highest.0
        ))
    } else {
        let names: Vec<&str> = over.iter().map(|(n, _)| n.as_str()).collect();
        Some(format!(
            "{i0:.2e} W/cm² ionizes {pct:.0} % or more of {} of the {} library molecules per pulse (ADK estimate): {}",
            over.len(),
            ceilings.len(),
            names.join(", ")
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ceilings(list: &[(&str, f64)]) -> Vec<(String, f64)> {
        list.iter().map(|(n, c)| (n.to_string(), *c)).collect()
    }

    #[test]
    fn ionization_warning_none_one_every_some() {
        let three = ceilings(&[("N2", 3e14), ("O2", 1e14), ("CO2", 2e14)]);
        // Below every ceiling (and at one: only above warns): nothing.
        assert_eq!(ionization_warning(5e13, &three), None);
        assert_eq!(ionization_warning(1e14, &ceilings(&[("O2", 1e14)])), None);
        assert_eq!(ionization_warning(1e13, &[]), None);
        // One named molecule, above its ceiling: its name and ceiling.
        assert_eq!(
            ionization_warning(2e14, &ceilings(&[("N2", 1.5e14)])).unwrap(),
            "2.00e14 W/cm² is above 1.50e14 W/cm², where one such pulse ionizes 10 % of N2 (ADK estimate): molecules do not survive to be aligned"
        );
        // Every molecule: the highest ceiling and its molecule.
        assert_eq!(
            ionization_warning(4e14, &three).unwrap(),
            "4.00e14 W/cm² is above the intensity where one such pulse ionizes 10 % of every library molecule \
             (ADK estimate; highest 3.00e14 W/cm² for N2): molecules do not survive to be aligned"
        );
        // Some: how many of how many, and which, in the order compared.
        assert_eq!(
            ionization_warning(2.5e14, &three).unwrap(),
            "2.50e14 W/cm² ionizes 10 % or more of 2 of the 3 library molecules per pulse (ADK estimate): O2, CO2"
        );
        // One of several is "some", not the single-molecule wording.
        assert!(ionization_warning(1.5e14, &three).unwrap().contains("1 of the 3 library molecules per pulse (ADK estimate): O2"));
    }

    #[test]
    fn report_of_a_named_molecule_and_field_named_errors() {
        let f = Focus { energy_mj: 2.0, waist_um: Some(5.0), beam_radius_mm: None, wavelength_nm: None, focal_length_mm: None, m2: 1.0 };
        let r = focus_report(&f, 40.0, "gaussian", Some("N2")).unwrap();
        // I0 = 2P/(πw0²) with P = 0.9394 E/τ: 2 × 4.697e10 W / (π × 2.5e-7 cm²) = 1.196e17 W/cm².
        assert!((r.peak_intensity_wcm2 / 1.196e17 - 1.0).abs() < 1e-3, "{}", r.peak_intensity_wcm2);
        assert_eq!(r.ionization_intensity_wcm2.len(), 1);
        assert!(r.warning.as_deref().unwrap().contains("of N2 (ADK estimate)"));
        assert_eq!(r.to_json()["warnings"].as_array().unwrap().len(), 1);
        let err = |shape: &str, molecule: Option<&str>| focus_report(&f, 40.0, shape, molecule).unwrap_err().to_string();
        assert!(err("box", None).starts_with("shape:"));
        assert!(err("gaussian", Some("unobtainium")).starts_with("molecule:"));
    }
}
