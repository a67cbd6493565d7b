//! The scenario file format: serde types that mirror the JSON a user writes (unknown keys refused), and
//! the two conversions, file → [`Scenario`] (with every range and unit checked) and back.

use super::{join, read, type_name};
use crate::error::{Error, Result, require_positive};
use crate::field::{FieldModel, Pulse, PulsePolarization, PulseShape, StaticField, TerahertzPulse, TwoColourPulse};
use crate::goal::{Goal, GoalKind, Observable};
use crate::molecule::top::{BodyAxis, Top, TopKind, TopSpinWeights};
use crate::molecule::{LinearRotor, Molecule, Rotor};
use crate::optics::focal::{FocalAverage, rayleigh_range_um};
use crate::optics::{Focus, peak_intensity_wcm2, peak_power_w};
use crate::scenario::{DEFAULT_MAX_STEPS, Method, MoleculeSource, Scenario, SolverSettings, Window};
use serde::{Deserialize, Serialize};
use serde_json::Value;

/// A scenario file.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioFile {
    /// Free text.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub description: Option<String>,
    /// The caution kicktrain writes into its files; ignored when read back.
    #[serde(default, skip_serializing)]
    pub laser_safety: Option<String>,
    /// A library name or an inline molecule (read by [`molecule`]).
    #[serde(default)]
    pub molecule: Option<Value>,
    /// Rotational temperature, K.
    pub temperature_k: f64,
    /// Laser pulses.
    #[serde(default)]
    pub pulses: Vec<PulseFile>,
    /// Static field.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub static_field: Option<StaticField>,
    /// Two-colour pulses.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub two_colour: Vec<TwoColourFile>,
    /// Terahertz pulses.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub terahertz: Vec<TerahertzPulse>,
    /// Output window.
    #[serde(default)]
    pub window: Option<Window>,
    /// Numerical settings.
    #[serde(default)]
    pub solver: Option<SolverFile>,
    /// Focal averaging.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub focal_average: Option<FocalFile>,
    /// Goal scored on the result.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub goal: Option<GoalFile>,
}

/// An inline linear molecule.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct LinearFile {
    name: Option<String>,
    b_cm: f64,
    #[serde(default)]
    d_cm: f64,
    alpha_parallel_a3: f64,
    alpha_perpendicular_a3: f64,
    spin_weights: Option<[f64; 2]>,
    #[serde(default, skip_serializing_if = "is_zero")]
    dipole_debye: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    beta_parallel_au: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    beta_perpendicular_au: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    ionization_energy_ev: Option<f64>,
}

/// Principal polarizability volumes, Å³.
#[derive(Debug, Clone, Copy, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct Principal {
    a: f64,
    b: f64,
    c: f64,
}

/// An inline symmetric or asymmetric top.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct TopFile {
    name: Option<String>,
    a_cm: f64,
    b_cm: f64,
    c_cm: f64,
    #[serde(default, skip_serializing_if = "is_zero")]
    d_j_cm: f64,
    #[serde(default, skip_serializing_if = "is_zero")]
    d_jk_cm: f64,
    #[serde(default, skip_serializing_if = "is_zero")]
    d_k_cm: f64,
    polarizability_a3: Option<Principal>,
    #[serde(default, skip_serializing_if = "is_zero")]
    dipole_debye: f64,
    dipole_axis: Option<String>,
    alignment_axis: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    spin_weights_by_k: Option<Vec<f64>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    spin_weights_by_ka_kc: Option<Vec<f64>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    ionization_energy_ev: Option<f64>,
    /// Hyperpolarizability along the figure axis of a symmetric top (atomic units, Taylor convention).
    #[serde(skip_serializing_if = "Option::is_none")]
    beta_parallel_au: Option<f64>,
    /// Hyperpolarizability across the figure axis.
    #[serde(skip_serializing_if = "Option::is_none")]
    beta_perpendicular_au: Option<f64>,
    /// Hyperpolarizability components β_dgg of an asymmetric top, d its dipole axis, g = a, b, c.
    #[serde(skip_serializing_if = "Option::is_none")]
    beta_au: Option<Principal>,
}

fn is_zero(x: &f64) -> bool {
    *x == 0.0
}

/// A laser pulse, given by its peak intensity or by its energy and focus.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PulseFile {
    center_ps: f64,
    fwhm_fs: f64,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    peak_intensity_wcm2: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    energy_mj: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    waist_um: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    beam_radius_mm: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    wavelength_nm: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    focal_length_mm: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    m2: Option<f64>,
    #[serde(default)]
    shape: PulseShape,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    rise_fs: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    cut_fs: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    polarization: Option<PulsePolarization>,
}

/// A two-colour pulse; the second harmonic by its intensity or its ratio to the fundamental.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TwoColourFile {
    center_ps: f64,
    fwhm_fs: f64,
    fundamental_intensity_wcm2: f64,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    second_harmonic_intensity_wcm2: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    second_harmonic_ratio: Option<f64>,
    #[serde(default)]
    phase_rad: f64,
    #[serde(default)]
    shape: PulseShape,
}

/// Solver settings as written in a file.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SolverFile {
    #[serde(default)]
    method: Method,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    step_fs: Option<f64>,
    #[serde(default)]
    thermal_tolerance: Option<f64>,
    #[serde(default)]
    edge_tolerance: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    both_parities: Option<bool>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    max_steps: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    max_states: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    frame_steps: Option<bool>,
}

/// Focal averaging as written in a file: each Rayleigh range in µm, or from a wavelength and M².
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FocalFile {
    pump_waist_um: f64,
    probe_waist_um: f64,
    probe_order: Option<f64>,
    points: Option<usize>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    sample_length_um: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pump_rayleigh_um: Option<f64>,
    #[serde(default, skip_serializing)]
    pump_wavelength_nm: Option<f64>,
    #[serde(default, skip_serializing)]
    pump_m2: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    probe_rayleigh_um: Option<f64>,
    #[serde(default, skip_serializing)]
    probe_wavelength_nm: Option<f64>,
    #[serde(default, skip_serializing)]
    probe_m2: Option<f64>,
}

/// A goal as written in a file.
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GoalFile {
    kind: Option<String>,
    observable: Option<Observable>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    at_ps: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    window_ps: Option<[f64; 2]>,
    step_fs: Option<f64>,
}

/// Read a scenario found at `path` of a parsed JSON document.
pub fn scenario(v: &Value, path: &str) -> Result<Scenario> {
    let file: ScenarioFile = read(v, path)?;
    let at = |key: &str| join(path, key);
    let mv = file.molecule.as_ref().ok_or_else(|| {
        Error::input(at("molecule"), "missing; expected a library name (see `kicktrain molecules`) or an object with b_cm, alpha_parallel_a3, ...")
    })?;
    let (molecule, molecule_source) = molecule(mv, &at("molecule"))?;
    let mut pulses = vec![];
    let mut pulse_optics = vec![];
    for (i, p) in file.pulses.iter().enumerate() {
        let (pulse, optics) = p.pulse(&format!("{}[{i}]", at("pulses")))?;
        pulses.push(pulse);
        pulse_optics.push(optics);
    }
    if let Some(sf) = &file.static_field {
        sf.validate(&at("static_field"))?;
    }
    let two_colour = file.two_colour.iter().enumerate().map(|(i, t)| t.pulse(&format!("{}[{i}]", at("two_colour")))).collect::<Result<Vec<_>>>()?;
    for (i, t) in file.terahertz.iter().enumerate() {
        t.validate(&format!("{}[{i}]", at("terahertz")))?;
    }
    let window = file.window.ok_or_else(|| Error::input(at("window"), "missing; expected an object with start_ps, stop_ps, step_fs"))?;
    window.validate(&at("window"))?;
    let solver = match &file.solver {
        None => SolverSettings::default(),
        Some(s) => s.settings(&at("solver"))?,
    };
    let focal_average = file.focal_average.as_ref().map(|f| f.average(&at("focal_average"))).transpose()?;
    let goal = file.goal.as_ref().map(|g| g.goal(&at("goal"))).transpose()?;
    let s = Scenario {
        description: file.description,
        molecule,
        molecule_source,
        temperature_k: file.temperature_k,
        field: FieldModel { pulses, static_field: file.static_field, two_colour, terahertz: file.terahertz },
        window,
        solver,
        goal,
        pulse_optics,
        focal_average,
    };
    s.validate_at(path)?;
    Ok(s)
}

/// A scenario as the file that [`scenario`] reads back to the same scenario.
pub fn scenario_file(s: &Scenario) -> ScenarioFile {
    let molecule = match &s.molecule_source {
        MoleculeSource::Library(name) => Value::String(name.clone()),
        MoleculeSource::Inline => molecule_value(&s.molecule),
    };
    let pulses = s.field.pulses.iter().enumerate().map(|(i, p)| PulseFile::from_pulse(p, s.pulse_optics.get(i).copied().flatten())).collect();
    let solver = SolverFile {
        method: s.solver.method,
        step_fs: s.solver.step_fs,
        thermal_tolerance: Some(s.solver.thermal_tolerance),
        edge_tolerance: Some(s.solver.edge_tolerance),
        both_parities: s.solver.both_parities.then_some(true),
        max_steps: Some(s.solver.max_steps).filter(|n| *n != DEFAULT_MAX_STEPS && n.is_finite()),
        max_states: s.solver.max_states.filter(|n| n.is_finite()),
        frame_steps: s.solver.frame_steps,
    };
    ScenarioFile {
        description: s.description.clone(),
        laser_safety: None,
        molecule: Some(molecule),
        temperature_k: s.temperature_k,
        pulses,
        static_field: s.field.static_field,
        two_colour: s.field.two_colour.iter().map(TwoColourFile::from_pulse).collect(),
        terahertz: s.field.terahertz.clone(),
        window: Some(s.window),
        solver: Some(solver),
        focal_average: s.focal_average.map(FocalFile::from_average),
        goal: s.goal.as_ref().map(GoalFile::from_goal),
    }
}

/// Read a molecule given by library name or inline (a top when it has a_cm, c_cm or polarizability_a3).
pub fn molecule(v: &Value, path: &str) -> Result<(Molecule, MoleculeSource)> {
    let m = match v {
        Value::String(name) => return Ok((Molecule::from_library(name, path)?, MoleculeSource::Library(name.clone()))),
        Value::Object(map) if map.contains_key("a_cm") || map.contains_key("c_cm") || map.contains_key("polarizability_a3") => {
            read::<TopFile>(v, path)?.molecule(path)?
        }
        Value::Object(_) => read::<LinearFile>(v, path)?.molecule(),
        other => return Err(Error::input(path, format!("expected a library name or an object, got {}", type_name(other)))),
    };
    m.validate(path)?;
    Ok((m, MoleculeSource::Inline))
}

/// An inline molecule as the value [`molecule`] reads back.
fn molecule_value(m: &Molecule) -> Value {
    match &m.rotor {
        Rotor::Top(t) => serde_json::to_value(TopFile::from_top(m, t)).expect("a top serializes"),
        Rotor::Linear(l) => serde_json::to_value(LinearFile::from_linear(m, l)).expect("a molecule serializes"),
    }
}

impl LinearFile {
    fn molecule(self) -> Molecule {
        Molecule {
            name: self.name.unwrap_or_else(|| "custom".to_string()),
            rotor: Rotor::Linear(LinearRotor {
                b_cm: self.b_cm,
                d_cm: self.d_cm,
                alpha_parallel_a3: self.alpha_parallel_a3,
                alpha_perpendicular_a3: self.alpha_perpendicular_a3,
                spin_weights: self.spin_weights.unwrap_or([1.0, 1.0]),
            }),
            dipole_debye: self.dipole_debye,
            beta_parallel_au: self.beta_parallel_au,
            beta_perpendicular_au: self.beta_perpendicular_au,
            beta_by_axis_au: None,
            ionization_energy_ev: self.ionization_energy_ev,
        }
    }

    /// The file form of a linear molecule, as written back.
    fn from_linear(m: &Molecule, l: &LinearRotor) -> LinearFile {
        LinearFile {
            name: Some(m.name.clone()),
            b_cm: l.b_cm,
            d_cm: l.d_cm,
            alpha_parallel_a3: l.alpha_parallel_a3,
            alpha_perpendicular_a3: l.alpha_perpendicular_a3,
            spin_weights: Some(l.spin_weights),
            dipole_debye: m.dipole_debye,
            beta_parallel_au: m.beta_parallel_au,
            beta_perpendicular_au: m.beta_perpendicular_au,
            ionization_energy_ev: m.ionization_energy_ev,
        }
    }
}

impl TopFile {
    fn molecule(self, path: &str) -> Result<Molecule> {
        let p = self.polarizability_a3.ok_or_else(|| {
            Error::input(
                join(path, "polarizability_a3"),
                "missing; expected an object {\"a\": …, \"b\": …, \"c\": …} of principal polarizability volumes in Å³",
            )
        })?;
        let polarizability_a3 = [p.a, p.b, p.c];
        let probe = Top { d_j_cm: self.d_j_cm, d_jk_cm: self.d_jk_cm, d_k_cm: self.d_k_cm, ..Top::rigid(self.a_cm, self.b_cm, self.c_cm, polarizability_a3) };
        let axis = |given: &Option<String>, key: &str| given.as_deref().map(|s| BodyAxis::parse(s, &join(path, key))).transpose();
        let figure = if probe.kind() == TopKind::Oblate { BodyAxis::C } else { BodyAxis::A };
        let dipole_axis = axis(&self.dipole_axis, "dipole_axis")?.unwrap_or(figure);
        let alignment_axis = axis(&self.alignment_axis, "alignment_axis")?.unwrap_or_else(|| Top::most_polarizable(&polarizability_a3));
        let spin_weights = match (self.spin_weights_by_k, self.spin_weights_by_ka_kc) {
            (Some(_), Some(_)) => {
                return Err(Error::input(
                    join(path, "spin_weights_by_k"),
                    "give spin_weights_by_k (symmetric tops) or spin_weights_by_ka_kc (asymmetric tops), not both",
                ));
            }
            (Some(w), None) => TopSpinWeights::ByK(w),
            (None, Some(w)) => TopSpinWeights::ByKaKc(w.try_into().map_err(|w: Vec<f64>| {
                Error::input(
                    join(path, "spin_weights_by_ka_kc"),
                    format!("expected four weights for the (Ka, Kc) parity classes [even-even, even-odd, odd-even, odd-odd], got {}", w.len()),
                )
            })?),
            (None, None) => TopSpinWeights::Equal,
        };
        let top = Top { dipole_axis, alignment_axis, spin_weights, ..probe };
        let mut m = Molecule::from_top(self.name.as_deref().unwrap_or("custom top"), top, self.dipole_debye, self.ionization_energy_ev);
        m.beta_parallel_au = self.beta_parallel_au;
        m.beta_perpendicular_au = self.beta_perpendicular_au;
        m.beta_by_axis_au = self.beta_au.map(|b| [b.a, b.b, b.c]);
        Ok(m)
    }

    fn from_top(m: &Molecule, t: &Top) -> TopFile {
        let (by_k, by_class) = match &t.spin_weights {
            TopSpinWeights::Equal => (None, None),
            TopSpinWeights::ByK(w) => (Some(w.clone()), None),
            TopSpinWeights::ByKaKc(w) => (None, Some(w.to_vec())),
        };
        let p = t.polarizability_a3;
        TopFile {
            name: Some(m.name.clone()),
            a_cm: t.a_cm,
            b_cm: t.b_cm,
            c_cm: t.c_cm,
            d_j_cm: t.d_j_cm,
            d_jk_cm: t.d_jk_cm,
            d_k_cm: t.d_k_cm,
            polarizability_a3: Some(Principal { a: p[0], b: p[1], c: p[2] }),
            dipole_debye: m.dipole_debye,
            dipole_axis: Some(t.dipole_axis.letter().to_string()),
            alignment_axis: Some(t.alignment_axis.letter().to_string()),
            spin_weights_by_k: by_k,
            spin_weights_by_ka_kc: by_class,
            ionization_energy_ev: m.ionization_energy_ev,
            beta_parallel_au: m.beta_parallel_au,
            beta_perpendicular_au: m.beta_perpendicular_au,
            beta_au: m.beta_by_axis_au.map(|b| Principal { a: b[0], b: b[1], c: b[2] }),
        }
    }
}

impl PulseFile {
    /// The pulse, and the energy and focus it was given by (None: given by its peak intensity).
    fn pulse(&self, path: &str) -> Result<(Pulse, Option<Focus>)> {
        let polarization = self.polarization.unwrap_or_default();
        if self.polarization.is_some() {
            polarization.validate(&join(path, "polarization"))?;
        }
        let mut p = Pulse {
            center_ps: self.center_ps,
            fwhm_fs: self.fwhm_fs,
            peak_intensity_wcm2: 0.0,
            shape: self.shape,
            rise_fs: self.rise_fs,
            cut_fs: self.cut_fs,
            polarization,
        };
        let optics = match (self.peak_intensity_wcm2, self.energy_mj) {
            (Some(i), None) => {
                let given = [
                    ("waist_um", self.waist_um),
                    ("beam_radius_mm", self.beam_radius_mm),
                    ("wavelength_nm", self.wavelength_nm),
                    ("focal_length_mm", self.focal_length_mm),
                ];
                if let Some((key, _)) = given.iter().find(|(_, v)| v.is_some()) {
                    return Err(Error::input(join(path, key), "focusing keys go with the pulse energy (energy_mj), not with peak_intensity_wcm2"));
                }
                p.peak_intensity_wcm2 = i;
                None
            }
            (None, Some(e)) => {
                let focus = Focus {
                    energy_mj: e,
                    waist_um: self.waist_um,
                    beam_radius_mm: self.beam_radius_mm,
                    wavelength_nm: self.wavelength_nm,
                    focal_length_mm: self.focal_length_mm,
                    m2: self.m2.unwrap_or(1.0),
                };
                focus.validate(path)?;
                require_positive(&join(path, "fwhm_fs"), self.fwhm_fs, "fs")?;
                p.peak_intensity_wcm2 = peak_intensity_wcm2(peak_power_w(e, p.envelope_area_ps()), focus.waist_m());
                Some(focus)
            }
            (Some(_), Some(_)) => return Err(Error::input(join(path, "energy_mj"), "give either peak_intensity_wcm2 or energy_mj with the focus, not both")),
            (None, None) => {
                return Err(Error::input(
                    join(path, "peak_intensity_wcm2"),
                    "missing; expected the peak intensity (W/cm²), or energy_mj with waist_um (or beam_radius_mm, wavelength_nm, focal_length_mm)",
                ));
            }
        };
        p.validate(path)?;
        Ok((p, optics))
    }

    /// Written back the way it was given: energy and focus instead of the derived intensity.
    fn from_pulse(p: &Pulse, optics: Option<Focus>) -> PulseFile {
        let o = optics.as_ref();
        PulseFile {
            center_ps: p.center_ps,
            fwhm_fs: p.fwhm_fs,
            peak_intensity_wcm2: optics.is_none().then_some(p.peak_intensity_wcm2),
            energy_mj: o.map(|o| o.energy_mj),
            waist_um: o.and_then(|o| o.waist_um),
            beam_radius_mm: o.and_then(|o| o.beam_radius_mm),
            wavelength_nm: o.and_then(|o| o.wavelength_nm),
            focal_length_mm: o.and_then(|o| o.focal_length_mm),
            m2: o.map(|o| o.m2).filter(|m| *m != 1.0),
            shape: p.shape,
            rise_fs: p.rise_fs,
            cut_fs: p.cut_fs,
            polarization: (!p.polarization.is_along_z()).then_some(p.polarization),
        }
    }
}

impl TwoColourFile {
    fn pulse(&self, path: &str) -> Result<TwoColourPulse> {
        let second_harmonic_intensity_wcm2 = match (self.second_harmonic_intensity_wcm2, self.second_harmonic_ratio) {
            (Some(i), None) => i,
            (None, Some(r)) => {
                if !(0.0..=10.0).contains(&r) {
                    return Err(Error::input(join(path, "second_harmonic_ratio"), format!("expected a ratio from 0 to 10, got {r}")));
                }
                r * self.fundamental_intensity_wcm2
            }
            (Some(_), Some(_)) => {
                return Err(Error::input(join(path, "second_harmonic_ratio"), "give second_harmonic_intensity_wcm2 or second_harmonic_ratio, not both"));
            }
            (None, None) => {
                return Err(Error::input(
                    join(path, "second_harmonic_intensity_wcm2"),
                    "missing; expected the second-harmonic peak intensity (W/cm²) or second_harmonic_ratio",
                ));
            }
        };
        let t = TwoColourPulse {
            center_ps: self.center_ps,
            fwhm_fs: self.fwhm_fs,
            fundamental_intensity_wcm2: self.fundamental_intensity_wcm2,
            second_harmonic_intensity_wcm2,
            phase_rad: self.phase_rad,
            shape: self.shape,
        };
        t.validate(path)?;
        Ok(t)
    }

    fn from_pulse(t: &TwoColourPulse) -> TwoColourFile {
        TwoColourFile {
            center_ps: t.center_ps,
            fwhm_fs: t.fwhm_fs,
            fundamental_intensity_wcm2: t.fundamental_intensity_wcm2,
            second_harmonic_intensity_wcm2: Some(t.second_harmonic_intensity_wcm2),
            second_harmonic_ratio: None,
            phase_rad: t.phase_rad,
            shape: t.shape,
        }
    }
}

impl SolverFile {
    /// The settings, with their ranges checked.
    pub fn settings(&self, path: &str) -> Result<SolverSettings> {
        let d = SolverSettings::default();
        let s = SolverSettings {
            method: self.method,
            step_fs: self.step_fs,
            thermal_tolerance: self.thermal_tolerance.unwrap_or(d.thermal_tolerance),
            edge_tolerance: self.edge_tolerance.unwrap_or(d.edge_tolerance),
            both_parities: self.both_parities.unwrap_or(false),
            max_steps: self.max_steps.unwrap_or(d.max_steps),
            max_states: self.max_states,
            frame_steps: self.frame_steps,
            ..d
        };
        if !(s.max_steps >= 1.0 && s.max_steps <= 1e12) {
            return Err(Error::input(join(path, "max_steps"), format!("expected 1 to 1e12 time steps, got {}", s.max_steps)));
        }
        if let Some(n) = s.max_states
            && !(1.0..=1e12).contains(&n)
        {
            return Err(Error::input(join(path, "max_states"), format!("expected 1 to 1e12 initial states, got {n}")));
        }
        Ok(s)
    }
}

impl FocalFile {
    /// The focal average, with each Rayleigh range resolved and the whole checked.
    pub fn average(&self, path: &str) -> Result<FocalAverage> {
        let mut a = FocalAverage::thin(self.pump_waist_um, self.probe_waist_um, self.probe_order.unwrap_or(1.0), self.points.unwrap_or(20));
        a.sample_length_um = self.sample_length_um;
        a.pump_rayleigh_um = rayleigh(path, "pump", self.pump_rayleigh_um, self.pump_wavelength_nm, self.pump_m2, a.pump_waist_um)?;
        a.probe_rayleigh_um = rayleigh(path, "probe", self.probe_rayleigh_um, self.probe_wavelength_nm, self.probe_m2, a.probe_waist_um)?;
        a.validate(path)?;
        Ok(a)
    }

    fn from_average(a: FocalAverage) -> FocalFile {
        FocalFile {
            pump_waist_um: a.pump_waist_um,
            probe_waist_um: a.probe_waist_um,
            probe_order: Some(a.probe_order),
            points: Some(a.points),
            sample_length_um: a.sample_length_um,
            pump_rayleigh_um: a.pump_rayleigh_um,
            pump_wavelength_nm: None,
            pump_m2: None,
            probe_rayleigh_um: a.probe_rayleigh_um,
            probe_wavelength_nm: None,
            probe_m2: None,
        }
    }
}

/// The Rayleigh range (µm) of the `beam` ("pump" or "probe"): given in µm, or from the wavelength (nm)
/// and M² with the waist `waist_um`.
fn rayleigh(path: &str, beam: &str, zr: Option<f64>, wl: Option<f64>, m2: Option<f64>, waist_um: f64) -> Result<Option<f64>> {
    match (zr, wl, m2) {
        (Some(_), Some(_), _) | (Some(_), None, Some(_)) => Err(Error::input(
            join(path, &format!("{beam}_rayleigh_um")),
            format!("expected either {beam}_rayleigh_um (µm) or {beam}_wavelength_nm (nm, with optional {beam}_m2), not both"),
        )),
        (None, None, Some(_)) => {
            Err(Error::input(join(path, &format!("{beam}_m2")), format!("only used with {beam}_wavelength_nm; expected the wavelength in nm as well")))
        }
        (z, None, None) => Ok(z),
        (None, Some(l), m) => {
            require_positive(&join(path, &format!("{beam}_wavelength_nm")), l, "nm")?;
            let m = m.unwrap_or(1.0);
            if !m.is_finite() || m < 1.0 {
                return Err(Error::input(join(path, &format!("{beam}_m2")), format!("expected a beam quality factor M² ≥ 1, got {m}")));
            }
            if !waist_um.is_finite() || waist_um <= 0.0 {
                return Err(Error::input(join(path, &format!("{beam}_waist_um")), format!("expected a finite number > 0 (µm), got {waist_um}")));
            }
            Ok(Some(rayleigh_range_um(waist_um, l, m)))
        }
    }
}

impl GoalFile {
    /// The goal, with its window checked.
    pub fn goal(&self, path: &str) -> Result<Goal> {
        let step_fs = self.step_fs.unwrap_or(10.0);
        require_positive(&join(path, "step_fs"), step_fs, "fs")?;
        let kind = match self.kind.as_deref().unwrap_or("peak") {
            "peak" => GoalKind::Peak,
            "mean" => GoalKind::Mean,
            "minimum" => GoalKind::Minimum,
            "value_at" => GoalKind::ValueAt(
                self.at_ps
                    .ok_or_else(|| Error::input(join(path, "at_ps"), "missing; expected the time (ps) after the last pulse centre for kind \"value_at\""))?,
            ),
            other => return Err(Error::input(join(path, "kind"), format!("expected \"peak\", \"value_at\", \"mean\" or \"minimum\", got \"{other}\""))),
        };
        let window_ps = match (kind, self.window_ps) {
            (GoalKind::ValueAt(t), _) => (t, t),
            (_, Some([a, b])) => (a, b),
            (_, None) => return Err(Error::input(join(path, "window_ps"), "missing; expected [start_ps, stop_ps] after the last pulse centre")),
        };
        if !matches!(kind, GoalKind::ValueAt(_)) {
            if window_ps.1 <= window_ps.0 {
                return Err(Error::input(join(path, "window_ps"), format!("expected stop > start, got [{}, {}]", window_ps.0, window_ps.1)));
            }
            if (window_ps.1 - window_ps.0) * 1000.0 / step_fs > 20_000.0 {
                return Err(Error::input(join(path, "step_fs"), "the goal window would hold more than 20000 samples; expected a larger step_fs"));
            }
        }
        if window_ps.0 < 0.0 {
            return Err(Error::input(
                join(path, if matches!(kind, GoalKind::ValueAt(_)) { "at_ps" } else { "window_ps" }),
                "expected times ≥ 0 after the last pulse centre",
            ));
        }
        Ok(Goal { kind, observable: self.observable.unwrap_or(Observable::Cos2), window_ps, step_fs })
    }

    /// The goal as written in a file.
    pub fn from_goal(g: &Goal) -> GoalFile {
        let (at_ps, window_ps) = match g.kind {
            GoalKind::ValueAt(t) => (Some(t), None),
            _ => (None, Some([g.window_ps.0, g.window_ps.1])),
        };
        GoalFile { kind: Some(g.kind_name().to_string()), observable: Some(g.observable), at_ps, window_ps, step_fs: Some(g.step_fs) }
    }
}
