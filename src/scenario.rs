//! A scenario: molecule, temperature, field model, time window and solver settings, and the checks of
//! its ranges and units. The file format it is read from and written to lives in `input::scenario_file`.

use crate::error::{Error, Result, require_non_negative, require_positive};
use crate::field::{FieldModel, Pulse};
use crate::goal::Goal;
use crate::input::{join, parse_json};
use crate::molecule::Molecule;
use crate::optics::Focus;
use crate::optics::focal::FocalAverage;
use serde::{Deserialize, Serialize};
use serde_json::Value;

/// How the solver treats laser pulses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// Kick where the pulse is short enough for the kick error to be negligible, else time-dependent
    /// (with static, two-colour or terahertz fields every pulse is propagated in time).
    #[default]
    Auto,
    /// Every pulse as an exact impulsive kick at its centre.
    Kick,
    /// Every pulse by the time-dependent solver.
    Finite,
}

impl Method {
    /// Name as written in files.
    pub fn name(&self) -> &'static str {
        match self {
            Method::Auto => "auto",
            Method::Kick => "kick",
            Method::Finite => "finite",
        }
    }
}

/// The time window of the output trace.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Window {
    /// First time, ps.
    pub start_ps: f64,
    /// Last time (inclusive when on the grid), ps.
    pub stop_ps: f64,
    /// Spacing, fs.
    pub step_fs: f64,
}

impl Window {
    /// The sample times in ps.
    pub fn times_ps(&self) -> Vec<f64> {
        let dt = self.step_fs / 1000.0;
        let n = ((self.stop_ps - self.start_ps) / dt + 1e-9).floor() as usize + 1;
        (0..n).map(|i| self.start_ps + i as f64 * dt).collect()
    }

    /// Check the window; errors name the field under `path`.
    pub fn validate(&self, path: &str) -> Result<()> {
        crate::error::require_time_ps(&join(path, "start_ps"), self.start_ps)?;
        crate::error::require_time_ps(&join(path, "stop_ps"), self.stop_ps)?;
        require_positive(&join(path, "step_fs"), self.step_fs, "fs")?;
        if self.stop_ps <= self.start_ps {
            return Err(Error::input(join(path, "stop_ps"), format!("expected a time after start_ps = {} ps, got {} ps", self.start_ps, self.stop_ps)));
        }
        let n = (self.stop_ps - self.start_ps) * 1000.0 / self.step_fs;
        if n > 2e6 {
            return Err(Error::input(join(path, "step_fs"), format!("window would hold {n:.0} points; expected at most 2e6 (use a larger step_fs)")));
        }
        Ok(())
    }
}

/// Numerical settings with safe defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SolverSettings {
    /// Kick, finite or automatic choice per pulse.
    pub method: Method,
    /// Time step of the finite-pulse solver, fs (None: chosen from the pulse and the basis).
    pub step_fs: Option<f64>,
    /// Largest thermal population left out of the ensemble (total fraction).
    pub thermal_tolerance: f64,
    /// Largest population allowed in the top two J levels of any block.
    pub edge_tolerance: f64,
    /// Use one block per |M| with both parities of J even when no field requires it (a check of the
    /// parity split, and the path that reports ⟨cosθ⟩ and ⟨cos³θ⟩).
    pub both_parities: bool,
    /// In the kick model, propagate terahertz pulses in time anyway (the designer's screening stage).
    pub kick_terahertz_as_finite: bool,
    /// In the kick model, the number of sub-kicks per laser pulse (1: one kick at its kick time; more:
    /// the split-kick model of `Pulse::quadrature_nodes`). Not read from scenario files.
    pub kick_nodes: usize,
    /// Most finite-pulse time steps one run may take (each step costs a few basis-sized products per
    /// block); a run that would take more is refused before it starts. Infinite: no limit.
    pub max_steps: f64,
    /// Most initial states a run may carry (None: [`DEFAULT_MAX_STATES_LINEAR`] for linear molecules,
    /// [`DEFAULT_MAX_STATES_TOP`] for tops); a larger thermal ensemble is refused before any propagation.
    pub max_states: Option<f64>,
    /// Step slow pulses in the frame of the instantaneous Hamiltonian (tops in a static field at an angle
    /// to Z): None chooses by the pulses' envelope time scales, Some(false) keeps the splitting steps.
    pub frame_steps: Option<bool>,
}

/// Default of [`SolverSettings::max_states`] for linear molecules (CS2 at 300 K: 15,753 states, 11 s).
pub const DEFAULT_MAX_STATES_LINEAR: f64 = 1e5;
/// Default of [`SolverSettings::max_states`] for tops (SO2 at 20 K: 5,743 states, 38 s; tops cost far
/// more per state than linear molecules).
pub const DEFAULT_MAX_STATES_TOP: f64 = 2e4;

/// Default of [`SolverSettings::max_steps`]: a few minutes of work for a room-temperature linear
/// molecule or a cold heavy one (a 10 ns pulse on OCS at 1 K takes about 1e4 steps and 11 s).
pub const DEFAULT_MAX_STEPS: f64 = 2e5;

impl SolverSettings {
    /// Lift the step and state limits (the command line's --allow-long, the Python module's `allow_long`).
    pub fn lift_size_limits(&mut self) {
        self.max_steps = f64::INFINITY;
        self.max_states = Some(f64::INFINITY);
    }
}

impl Default for SolverSettings {
    fn default() -> Self {
        SolverSettings {
            method: Method::Auto,
            step_fs: None,
            thermal_tolerance: 1e-7,
            edge_tolerance: 1e-8,
            both_parities: false,
            kick_terahertz_as_finite: false,
            kick_nodes: 1,
            max_steps: DEFAULT_MAX_STEPS,
            max_states: None,
            frame_steps: None,
        }
    }
}

/// Where the molecule came from, so a scenario writes back the way it was given.
#[derive(Debug, Clone, PartialEq)]
pub enum MoleculeSource {
    /// A library name.
    Library(String),
    /// An inline object.
    Inline,
}

/// One complete simulation job.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    /// Free text describing the scenario.
    pub description: Option<String>,
    /// The molecule.
    pub molecule: Molecule,
    /// How the molecule was given.
    pub molecule_source: MoleculeSource,
    /// Rotational temperature, K.
    pub temperature_k: f64,
    /// The fields acting on the molecule.
    pub field: FieldModel,
    /// The output time window.
    pub window: Window,
    /// Numerical settings.
    pub solver: SolverSettings,
    /// Optional goal scored on the result (as the designer scores it), relative to the last pulse centre.
    pub goal: Option<Goal>,
    /// For each laser pulse, the energy and focus it was given by (None: given by its peak intensity).
    pub pulse_optics: Vec<Option<Focus>>,
    /// Average over the pump and probe foci (None: on-axis only).
    pub focal_average: Option<FocalAverage>,
}

impl Scenario {
    /// A scenario for a library molecule with default solver settings.
    pub fn new(molecule: &str, temperature_k: f64, pulses: Vec<Pulse>, window: Window) -> Result<Scenario> {
        let s = Scenario {
            description: None,
            molecule: Molecule::from_library(molecule, "molecule")?,
            molecule_source: MoleculeSource::Library(molecule.to_string()),
            temperature_k,
            field: FieldModel { pulses, static_field: None, ..Default::default() },
            window,
            solver: SolverSettings::default(),
            goal: None,
            pulse_optics: vec![],
            focal_average: None,
        };
        s.validate()?;
        Ok(s)
    }

    /// Read a scenario from JSON text (`file` names the source in syntax errors).
    pub fn from_json_str(text: &str, file: &str) -> Result<Scenario> {
        let v = parse_json(text, file)?;
        Scenario::from_value(&v, "")
    }

    /// Read a scenario from a parsed JSON value found at `path`.
    pub fn from_value(v: &Value, path: &str) -> Result<Scenario> {
        crate::input::scenario_file::scenario(v, path)
    }

    /// Check the whole scenario.
    pub fn validate(&self) -> Result<()> {
        self.validate_at("")
    }

    /// Check the whole scenario, found at `path` of a larger document.
    pub(crate) fn validate_at(&self, path: &str) -> Result<()> {
        self.molecule.validate(&join(path, "molecule"))?;
        require_non_negative(&join(path, "temperature_k"), self.temperature_k, "K")?;
        if self.temperature_k > 5000.0 {
            return Err(Error::input(join(path, "temperature_k"), format!("expected at most 5000 K for a rotational temperature, got {}", self.temperature_k)));
        }
        for (i, p) in self.field.pulses.iter().enumerate() {
            p.validate(&format!("{}[{i}]", join(path, "pulses")))?;
        }
        if let Some(sf) = &self.field.static_field {
            sf.validate(&join(path, "static_field"))?;
            if sf.strength_kv_cm != 0.0 && !self.molecule.is_polar() {
                return Err(Error::input(
                    join(path, "molecule.dipole_debye"),
                    format!("a static field needs a polar molecule, but {} has no permanent dipole (give dipole_debye)", self.molecule.name),
                ));
            }
            if self.field.static_without_axis() && (!self.field.two_colour.is_empty() || !self.field.terahertz.is_empty()) {
                return Err(Error::input(
                    join(path, if sf.is_tilted() { "static_field.angle_deg" } else { "pulses.polarization" }),
                    "a static field at an angle to Z, or with pulses polarized away from Z, cannot yet be combined with two-colour or terahertz pulses",
                ));
            }
        }
        for (i, tc) in self.field.two_colour.iter().enumerate() {
            let p = format!("{}[{i}]", join(path, "two_colour"));
            tc.validate(&p)?;
            if self.molecule.kind() == crate::molecule::RotorKind::AsymmetricTop {
                if self.molecule.beta_by_axis_au.is_none() {
                    return Err(Error::input(
                        join(path, "molecule.beta_au"),
                        format!(
                            "a two-colour pulse needs the hyperpolarizability of {} (beta_au: β_dgg along a, b, c in atomic units, Taylor convention, d the dipole axis); give it in an inline molecule",
                            self.molecule.name
                        ),
                    ));
                }
                continue;
            }
            for (name, v) in [("beta_parallel_au", self.molecule.beta_parallel_au), ("beta_perpendicular_au", self.molecule.beta_perpendicular_au)] {
                if v.is_none() {
                    return Err(Error::input(
                        join(path, &format!("molecule.{name}")),
                        format!(
                            "a two-colour pulse needs the hyperpolarizability of {} (β∥ and β⊥ in atomic units, Taylor convention); give it in an inline molecule",
                            self.molecule.name
                        ),
                    ));
                }
            }
        }
        for (i, th) in self.field.terahertz.iter().enumerate() {
            th.validate(&format!("{}[{i}]", join(path, "terahertz")))?;
            if !self.molecule.is_polar() {
                return Err(Error::input(
                    join(path, "molecule.dipole_debye"),
                    format!("a terahertz pulse needs a polar molecule, but {} has no permanent dipole", self.molecule.name),
                ));
            }
        }
        if let Some(g) = &self.goal {
            g.check_rotor(&self.molecule, &join(path, "goal"))?;
            if g.observable == crate::goal::Observable::Cos2TwoD && self.field.static_without_axis() {
                return Err(Error::input(
                    join(path, "goal.observable"),
                    "⟨cos²θ_2D⟩ is not computed yet in a static field that is tilted or joined by pulses polarized away from Z; expected cos2 or cos",
                ));
            }
        }
        if let Some(g) = &self.goal
            && g.observable == crate::goal::Observable::ThreeAxisOriented
            && !self.field.static_without_axis()
        {
            return Err(Error::input(
                join(path, "goal.observable"),
                "three-axis orientation needs a static field together with pulses polarized away from Z or a tilted static field",
            ));
        }
        if let Some(g) = &self.goal
            && g.observable == crate::goal::Observable::CosX
            && !self.field.static_field.is_some_and(|s| s.is_tilted())
        {
            return Err(Error::input(
                join(path, "goal.observable"),
                "⟨cosθ_X⟩ needs a static field tilted towards X (static_field.angle_deg not 0 or 180); otherwise it is zero",
            ));
        }
        if let Some(g) = &self.goal
            && g.observable == crate::goal::Observable::Cos
            && !self.field.is_polar()
        {
            return Err(Error::input(
                join(path, "goal.observable"),
                "⟨cosθ⟩ needs a field that orients (static_field, two_colour or terahertz); a laser alone gives zero",
            ));
        }
        self.window.validate(&join(path, "window"))?;
        let s = &self.solver;
        let sp = join(path, "solver");
        if let Some(dt) = s.step_fs {
            require_positive(&join(&sp, "step_fs"), dt, "fs")?;
            if dt < 0.01 {
                return Err(Error::input(join(&sp, "step_fs"), format!("expected a solver step of at least 0.01 fs, got {dt}")));
            }
        }
        for (name, v, lo, hi) in [("thermal_tolerance", s.thermal_tolerance, 1e-14, 1e-2), ("edge_tolerance", s.edge_tolerance, 1e-14, 1e-3)] {
            if !(v >= lo && v <= hi) {
                return Err(Error::input(join(&sp, name), format!("expected a population fraction between {lo:e} and {hi:e}, got {v}")));
            }
        }
        Ok(())
    }

    /// Centre of the last pulse (ps), the reference of goal windows; 0 without pulses.
    pub fn last_pulse_center_ps(&self) -> f64 {
        self.field.last_center_ps()
    }

    /// The scenario as a JSON value that `from_value` reads back to the same scenario.
    pub fn to_value(&self) -> Value {
        serde_json::to_value(crate::input::scenario_file::scenario_file(self)).expect("a scenario serializes")
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::field::PulsePolarization;

    const GOOD: &str = r#"{"molecule":"N2","temperature_k":300,
        "pulses":[{"center_ps":0.0,"fwhm_fs":50,"peak_intensity_wcm2":5e13}],
        "window":{"start_ps":0.2,"stop_ps":12.0,"step_fs":20}}"#;

    #[test]
    fn reads_the_documented_example_and_round_trips() {
        let s = Scenario::from_json_str(GOOD, "x").unwrap();
        assert_eq!(s.field.pulses.len(), 1);
        assert_eq!(s.window.times_ps().len(), 591);
        let back = Scenario::from_value(&s.to_value(), "").unwrap();
        assert_eq!(back, s);
    }

    fn err(text: &str) -> String {
        Scenario::from_json_str(text, "x").unwrap_err().to_string()
    }

    #[test]
    fn pulses_given_by_energy_and_focus() {
        // 1 mJ, 100 fs Gaussian focused to w0 = 50 µm: I0 = 2.392e14 W/cm² (worked in optics::tests, Siegman 1986).
        let text = GOOD.replace("\"peak_intensity_wcm2\":5e13", "\"energy_mj\":1.0,\"waist_um\":50").replace("\"fwhm_fs\":50", "\"fwhm_fs\":100");
        let s = Scenario::from_json_str(&text, "x").unwrap();
        assert!((s.field.pulses[0].peak_intensity_wcm2 / 2.392e14 - 1.0).abs() < 5e-4);
        let back = Scenario::from_value(&s.to_value(), "").unwrap();
        assert_eq!(back, s);
        let both = text.replace("\"energy_mj\":1.0", "\"energy_mj\":1.0,\"peak_intensity_wcm2\":1e13");
        assert!(err(&both).starts_with("pulses[0].energy_mj:"));
        let bad_m2 = text.replace("\"waist_um\":50", "\"waist_um\":50,\"m2\":0.5");
        assert!(err(&bad_m2).starts_with("pulses[0].m2:"));
    }

    #[test]
    fn polarization_reads_round_trips_and_refuses_bad_values() {
        let text = GOOD.replace("\"fwhm_fs\":50", "\"fwhm_fs\":50,\"polarization\":{\"angle_deg\":90,\"ellipticity\":0.5}");
        let s = Scenario::from_json_str(&text, "x").unwrap();
        assert_eq!(s.field.pulses[0].polarization, PulsePolarization { angle_deg: 90.0, ellipticity: 0.5 });
        assert!(!s.field.is_symmetric_about_z());
        assert_eq!(Scenario::from_value(&s.to_value(), "").unwrap(), s);
        for bad in ["1.5", "-0.1"] {
            let e = err(&text.replace("\"ellipticity\":0.5", &format!("\"ellipticity\":{bad}")));
            assert!(e.starts_with("pulses[0].polarization.ellipticity: expected a minor-to-major field ratio between 0 and 1"), "{e}");
        }
        assert!(err(&text.replace("\"angle_deg\":90", "\"angle_deg\":\"x\"")).starts_with("pulses[0].polarization.angle_deg: expected a number"));
        assert!(err(&text.replace("\"angle_deg\":90", "\"angle\":90")).starts_with("pulses[0].polarization.angle: unknown key"));
        let mut p = s.field.pulses[0].clone();
        p.polarization.angle_deg = f64::NAN;
        assert!(p.validate("pulses[0]").unwrap_err().to_string().starts_with("pulses[0].polarization.angle_deg: expected a finite angle"));
        // Along Z (any multiple of 180°) the field stays symmetric about Z.
        let z = GOOD.replace("\"fwhm_fs\":50", "\"fwhm_fs\":50,\"polarization\":{\"angle_deg\":180}");
        assert!(Scenario::from_json_str(&z, "x").unwrap().field.is_symmetric_about_z());
    }

    #[test]
    fn errors_name_the_field() {
        assert!(err(&GOOD.replace("\"temperature_k\":300", "\"temperature_k\":-1")).starts_with("temperature_k:"));
        assert!(err(&GOOD.replace("\"fwhm_fs\":50", "\"fwhm_fs\":0")).starts_with("pulses[0].fwhm_fs:"));
        assert!(err(&GOOD.replace("\"stop_ps\":12.0", "\"stop_ps\":0.1")).starts_with("window.stop_ps:"));
        assert!(err(&GOOD.replace("\"N2\"", "\"N22\"")).contains("did you mean"));
        assert!(err(&GOOD.replace("\"temperature_k\"", "\"temperature\"")).starts_with("temperature: unknown key (did you mean temperature_k?)"));
        assert!(err(&GOOD.replace("\"temperature_k\":300,", "")).starts_with("temperature_k: missing; expected a number (K)"));
        assert!(err(&GOOD.replace("\"fwhm_fs\":50", "\"fwhm_fs\":50,\"colour\":1")).starts_with("pulses[0].colour: unknown key"));
        assert!(err(&GOOD.replace("\"fwhm_fs\":50", "\"fwhm_fs\":\"50\"")).starts_with("pulses[0].fwhm_fs: expected a number"));
        assert!(err("{").starts_with("x: not valid JSON"));
        assert!(err("[]").starts_with("(top level): expected an object"));
    }
}
