//! The scenario file: molecule, temperature, field model, time window and solver settings.
//! Parsed field by field so that every error names the field and the expected unit or range.

use crate::error::{Error, Result, require_non_negative, require_positive};
use crate::field::{FieldModel, Pulse, PulsePolarization, PulseShape, StaticField, TerahertzPulse, TerahertzWaveform, TwoColourPulse};
use crate::goal::{Goal, parse_goal};
use crate::input::{Fields, join, parse_json, type_name};
use crate::molecule::Molecule;
use crate::optics::focal::{FocalAverage, rayleigh_range_um};
use crate::optics::{Focus, peak_intensity_wcm2, peak_power_w};
use serde_json::{Value, json};

/// How the solver treats laser pulses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
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
#[derive(Debug, Clone, Copy, PartialEq)]
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

    fn validate(&self, path: &str) -> Result<()> {
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
}

/// Default of [`SolverSettings::max_states`] for linear molecules (CS2 at 300 K: 15,753 states, 11 s).
pub const DEFAULT_MAX_STATES_LINEAR: f64 = 1e5;
/// Default of [`SolverSettings::max_states`] for tops (SO2 at 20 K: 5,743 states, 38 s; tops cost far
/// more per state than linear molecules).
pub const DEFAULT_MAX_STATES_TOP: f64 = 2e4;

/// Default of [`SolverSettings::max_steps`]: a few minutes of work for a room-temperature linear
/// molecule or a cold heavy one (a 10 ns pulse on OCS at 1 K takes about 1e4 steps and 11 s).
pub const DEFAULT_MAX_STEPS: f64 = 2e5;

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
        let mut f = Fields::new(v, path)?;
        let description = f.opt_str("description", "a string")?.map(str::to_string);
        // Files kicktrain writes carry the laser-safety caution; reading one back ignores it.
        f.opt_str("laser_safety", "a string")?;
        let mv = f.req_value("molecule", "a library name (see `kicktrain molecules`) or an object with b_cm, alpha_parallel_a3, ...")?;
        let (molecule, molecule_source) = parse_molecule(mv, &f.path_of("molecule"))?;
        let temperature_k = f.req_f64("temperature_k", "K")?;
        let mut pulse_optics = vec![];
        let pulses = match f.opt_value("pulses") {
            None => vec![],
            Some(Value::Array(items)) => {
                let mut out = vec![];
                for (i, item) in items.iter().enumerate() {
                    let (p, optics) = parse_pulse(item, &format!("{}[{i}]", f.path_of("pulses")))?;
                    out.push(p);
                    pulse_optics.push(optics);
                }
                out
            }
            Some(other) => return Err(Error::input(f.path_of("pulses"), format!("expected an array of pulses, got {}", type_name(other)))),
        };
        let static_field = match f.opt_value("static_field") {
            None => None,
            Some(v) => Some(parse_static(v, &f.path_of("static_field"))?),
        };
        let two_colour = parse_list(f.opt_value("two_colour"), &f.path_of("two_colour"), parse_two_colour)?;
        let terahertz = parse_list(f.opt_value("terahertz"), &f.path_of("terahertz"), parse_terahertz)?;
        let wv = f.req_value("window", "an object with start_ps, stop_ps, step_fs")?;
        let window = parse_window(wv, &f.path_of("window"))?;
        let solver = match f.opt_value("solver") {
            None => SolverSettings::default(),
            Some(sv) => parse_solver(sv, &f.path_of("solver"))?,
        };
        let focal_average = match f.opt_value("focal_average") {
            None => None,
            Some(v) => Some(parse_focal(v, &f.path_of("focal_average"))?),
        };
        let goal = match f.opt_value("goal") {
            None => None,
            Some(g) => Some(parse_goal(g, &f.path_of("goal"))?),
        };
        f.finish()?;
        let s = Scenario {
            description,
            molecule,
            molecule_source,
            temperature_k,
            field: FieldModel { pulses, static_field, two_colour, terahertz },
            window,
            solver,
            goal,
            pulse_optics,
            focal_average,
        };
        s.validate_at(path)?;
        Ok(s)
    }

    /// Check the whole scenario.
    pub fn validate(&self) -> Result<()> {
        self.validate_at("")
    }

    fn validate_at(&self, path: &str) -> Result<()> {
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
        }
        for (i, tc) in self.field.two_colour.iter().enumerate() {
            let p = format!("{}[{i}]", join(path, "two_colour"));
            tc.validate(&p)?;
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
        if let Some(g) = &self.goal
            && g.observable == crate::goal::Observable::ThreeAxis
            && self.molecule.top.is_none()
        {
            return Err(Error::input(
                join(path, "goal.observable"),
                format!("a three-axis goal needs a symmetric or asymmetric top; {} is linear (one axis)", self.molecule.name),
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
        let molecule = match &self.molecule_source {
            MoleculeSource::Library(name) => json!(name),
            MoleculeSource::Inline => match &self.molecule.top {
                Some(t) => top_to_value(&self.molecule, t),
                None => serde_json::to_value(&self.molecule).expect("molecule serializes"),
            },
        };
        let mut obj = serde_json::Map::new();
        if let Some(d) = &self.description {
            obj.insert("description".into(), json!(d));
        }
        obj.insert("molecule".into(), molecule);
        obj.insert("temperature_k".into(), json!(self.temperature_k));
        let mut pulses = serde_json::to_value(&self.field.pulses).expect("pulses serialize");
        if let Value::Array(items) = &mut pulses {
            for (item, optics) in items.iter_mut().zip(&self.pulse_optics) {
                if let (Some(o), Value::Object(map)) = (optics, item) {
                    // Written back the way it was given: energy and focus instead of the derived intensity.
                    map.remove("peak_intensity_wcm2");
                    if let Value::Object(fm) = serde_json::to_value(o).expect("focus serializes") {
                        map.extend(fm);
                    }
                }
            }
        }
        obj.insert("pulses".into(), pulses);
        if let Some(sf) = &self.field.static_field {
            obj.insert("static_field".into(), serde_json::to_value(sf).expect("static field serializes"));
        }
        if !self.field.two_colour.is_empty() {
            obj.insert("two_colour".into(), serde_json::to_value(&self.field.two_colour).expect("serializes"));
        }
        if !self.field.terahertz.is_empty() {
            obj.insert("terahertz".into(), serde_json::to_value(&self.field.terahertz).expect("serializes"));
        }
        obj.insert("window".into(), json!({"start_ps": self.window.start_ps, "stop_ps": self.window.stop_ps, "step_fs": self.window.step_fs}));
        let mut solver = serde_json::Map::new();
        solver.insert("method".into(), json!(self.solver.method.name()));
        if let Some(dt) = self.solver.step_fs {
            solver.insert("step_fs".into(), json!(dt));
        }
        solver.insert("thermal_tolerance".into(), json!(self.solver.thermal_tolerance));
        solver.insert("edge_tolerance".into(), json!(self.solver.edge_tolerance));
        if self.solver.max_steps != DEFAULT_MAX_STEPS && self.solver.max_steps.is_finite() {
            solver.insert("max_steps".into(), json!(self.solver.max_steps));
        }
        if let Some(n) = self.solver.max_states.filter(|n| n.is_finite()) {
            solver.insert("max_states".into(), json!(n));
        }
        if self.solver.both_parities {
            solver.insert("both_parities".into(), json!(true));
        }
        obj.insert("solver".into(), Value::Object(solver));
        if let Some(g) = &self.goal {
            obj.insert("goal".into(), g.to_value());
        }
        if let Some(a) = &self.focal_average {
            obj.insert("focal_average".into(), serde_json::to_value(a).expect("serializes"));
        }
        Value::Object(obj)
    }
}

fn parse_molecule(v: &Value, path: &str) -> Result<(Molecule, MoleculeSource)> {
    match v {
        Value::String(name) => Ok((Molecule::from_library(name, path)?, MoleculeSource::Library(name.clone()))),
        Value::Object(map) if map.contains_key("a_cm") || map.contains_key("c_cm") || map.contains_key("polarizability_a3") => {
            let m = parse_top(v, path)?;
            m.validate(path)?;
            Ok((m, MoleculeSource::Inline))
        }
        Value::Object(_) => {
            let mut f = Fields::new(v, path)?;
            let name = f.opt_str("name", "a string")?.unwrap_or("custom").to_string();
            let b_cm = f.req_f64("b_cm", "cm⁻¹")?;
            let d_cm = f.opt_f64("d_cm", "cm⁻¹")?.unwrap_or(0.0);
            let alpha_parallel_a3 = f.req_f64("alpha_parallel_a3", "Å³")?;
            let alpha_perpendicular_a3 = f.req_f64("alpha_perpendicular_a3", "Å³")?;
            let spin_weights = match f.opt_value("spin_weights") {
                None => [1.0, 1.0],
                Some(Value::Array(a)) if a.len() == 2 => {
                    let p = join(path, "spin_weights");
                    [crate::input::as_f64(&a[0], &format!("{p}[0]"), "even-J weight")?, crate::input::as_f64(&a[1], &format!("{p}[1]"), "odd-J weight")?]
                }
                Some(other) => return Err(Error::input(join(path, "spin_weights"), format!("expected [even_J, odd_J] (two numbers), got {other}"))),
            };
            let dipole_debye = f.opt_f64("dipole_debye", "debye")?.unwrap_or(0.0);
            let beta_parallel_au = f.opt_f64("beta_parallel_au", "atomic units, Taylor convention")?;
            let beta_perpendicular_au = f.opt_f64("beta_perpendicular_au", "atomic units, Taylor convention")?;
            let ionization_energy_ev = f.opt_f64("ionization_energy_ev", "eV")?;
            f.finish()?;
            let m = Molecule {
                name,
                b_cm,
                d_cm,
                alpha_parallel_a3,
                alpha_perpendicular_a3,
                spin_weights,
                dipole_debye,
                beta_parallel_au,
                beta_perpendicular_au,
                ionization_energy_ev,
                top: None,
            };
            m.validate(path)?;
            Ok((m, MoleculeSource::Inline))
        }
        other => Err(Error::input(path, format!("expected a library name or an object, got {}", type_name(other)))),
    }
}

/// Read an inline symmetric or asymmetric top (keys a_cm, b_cm, c_cm, polarizability_a3 {a, b, c}, ...).
fn parse_top(v: &Value, path: &str) -> Result<Molecule> {
    use crate::molecule::top::{BodyAxis, Top, TopSpinWeights};
    let mut f = Fields::new(v, path)?;
    let name = f.opt_str("name", "a string")?.unwrap_or("custom top").to_string();
    let a_cm = f.req_f64("a_cm", "cm⁻¹")?;
    let b_cm = f.req_f64("b_cm", "cm⁻¹")?;
    let c_cm = f.req_f64("c_cm", "cm⁻¹")?;
    let d_j_cm = f.opt_f64("d_j_cm", "cm⁻¹")?.unwrap_or(0.0);
    let d_jk_cm = f.opt_f64("d_jk_cm", "cm⁻¹")?.unwrap_or(0.0);
    let d_k_cm = f.opt_f64("d_k_cm", "cm⁻¹")?.unwrap_or(0.0);
    let pv = f.req_value("polarizability_a3", "an object {\"a\": …, \"b\": …, \"c\": …} of principal polarizability volumes in Å³")?;
    let mut pf = Fields::new(pv, &f.path_of("polarizability_a3"))?;
    let polarizability_a3 = [pf.req_f64("a", "Å³")?, pf.req_f64("b", "Å³")?, pf.req_f64("c", "Å³")?];
    pf.finish()?;
    let dipole_debye = f.opt_f64("dipole_debye", "debye")?.unwrap_or(0.0);
    let axis = |f: &mut Fields, key: &str| -> Result<Option<BodyAxis>> {
        let p = f.path_of(key);
        f.opt_str(key, "\"a\", \"b\" or \"c\"")?.map(|s| BodyAxis::parse(s, &p)).transpose()
    };
    let kind_probe = Top { d_j_cm, d_jk_cm, d_k_cm, ..Top::rigid(a_cm, b_cm, c_cm, polarizability_a3) };
    let figure = if kind_probe.kind() == crate::molecule::top::TopKind::Oblate { BodyAxis::C } else { BodyAxis::A };
    let dipole_axis = axis(&mut f, "dipole_axis")?.unwrap_or(figure);
    let alignment_axis = axis(&mut f, "alignment_axis")?.unwrap_or_else(|| Top::most_polarizable(&polarizability_a3));
    let numbers = |v: &Value, p: &str| -> Result<Vec<f64>> {
        match v {
            Value::Array(a) => a.iter().enumerate().map(|(i, x)| crate::input::as_f64(x, &format!("{p}[{i}]"), "relative weight")).collect(),
            other => Err(Error::input(p, format!("expected an array of relative weights, got {}", type_name(other)))),
        }
    };
    let by_k = f.opt_value("spin_weights_by_k").map(|v| numbers(v, &join(path, "spin_weights_by_k"))).transpose()?;
    let by_class = f.opt_value("spin_weights_by_ka_kc").map(|v| numbers(v, &join(path, "spin_weights_by_ka_kc"))).transpose()?;
    let spin_weights = match (by_k, by_class) {
        (Some(_), Some(_)) => {
            return Err(Error::input(
                join(path, "spin_weights_by_k"),
                "give spin_weights_by_k (symmetric tops) or spin_weights_by_ka_kc (asymmetric tops), not both",
            ));
        }
        (Some(w), None) => TopSpinWeights::ByK(w),
        (None, Some(w)) => {
            let arr: [f64; 4] = w.try_into().map_err(|w: Vec<f64>| {
                Error::input(
                    join(path, "spin_weights_by_ka_kc"),
                    format!("expected four weights for the (Ka, Kc) parity classes [even-even, even-odd, odd-even, odd-odd], got {}", w.len()),
                )
            })?;
            TopSpinWeights::ByKaKc(arr)
        }
        (None, None) => TopSpinWeights::Equal,
    };
    let ionization_energy_ev = f.opt_f64("ionization_energy_ev", "eV")?;
    f.finish()?;
    let top = Top { dipole_axis, alignment_axis, spin_weights, ..kind_probe };
    Ok(Molecule::from_top(&name, top, dipole_debye, ionization_energy_ev))
}

/// An inline top written back in the form `parse_top` reads.
fn top_to_value(m: &Molecule, t: &crate::molecule::top::Top) -> Value {
    use crate::molecule::top::TopSpinWeights;
    let mut obj = serde_json::Map::new();
    obj.insert("name".into(), json!(m.name));
    obj.insert("a_cm".into(), json!(t.a_cm));
    obj.insert("b_cm".into(), json!(t.b_cm));
    obj.insert("c_cm".into(), json!(t.c_cm));
    for (k, v) in [("d_j_cm", t.d_j_cm), ("d_jk_cm", t.d_jk_cm), ("d_k_cm", t.d_k_cm)] {
        if v != 0.0 {
            obj.insert(k.into(), json!(v));
        }
    }
    let p = t.polarizability_a3;
    obj.insert("polarizability_a3".into(), json!({"a": p[0], "b": p[1], "c": p[2]}));
    if m.dipole_debye != 0.0 {
        obj.insert("dipole_debye".into(), json!(m.dipole_debye));
    }
    obj.insert("dipole_axis".into(), json!(t.dipole_axis.letter()));
    obj.insert("alignment_axis".into(), json!(t.alignment_axis.letter()));
    match &t.spin_weights {
        TopSpinWeights::Equal => {}
        TopSpinWeights::ByK(w) => {
            obj.insert("spin_weights_by_k".into(), json!(w));
        }
        TopSpinWeights::ByKaKc(w) => {
            obj.insert("spin_weights_by_ka_kc".into(), json!(w));
        }
    }
    if let Some(ip) = m.ionization_energy_ev {
        obj.insert("ionization_energy_ev".into(), json!(ip));
    }
    Value::Object(obj)
}

fn parse_pulse(v: &Value, path: &str) -> Result<(Pulse, Option<Focus>)> {
    let mut f = Fields::new(v, path)?;
    let center_ps = f.req_f64("center_ps", "ps")?;
    let fwhm_fs = f.req_f64("fwhm_fs", "fs")?;
    let intensity = f.opt_f64("peak_intensity_wcm2", "W/cm²")?;
    let energy = f.opt_f64("energy_mj", "mJ")?;
    let waist_um = f.opt_f64("waist_um", "µm")?;
    let beam_radius_mm = f.opt_f64("beam_radius_mm", "mm")?;
    let wavelength_nm = f.opt_f64("wavelength_nm", "nm")?;
    let focal_length_mm = f.opt_f64("focal_length_mm", "mm")?;
    let m2 = f.opt_f64("m2", "beam quality factor")?.unwrap_or(1.0);
    let shape = match f.opt_str("shape", PulseShape::NAMES)? {
        None => PulseShape::Gaussian,
        Some(s) => PulseShape::parse(s).ok_or_else(|| Error::input(join(path, "shape"), format!("expected {}, got \"{s}\"", PulseShape::NAMES)))?,
    };
    let rise_fs = f.opt_f64("rise_fs", "fs")?;
    let cut_fs = f.opt_f64("cut_fs", "fs")?;
    let polarization = match f.opt_value("polarization") {
        None => PulsePolarization::default(),
        Some(v) => {
            let at = join(path, "polarization");
            let mut g = Fields::new(v, &at)?;
            let angle_deg = g.opt_f64("angle_deg", "degrees")?.unwrap_or(0.0);
            let ellipticity = g.opt_f64("ellipticity", "minor-to-major field ratio, 0 to 1")?.unwrap_or(0.0);
            g.finish()?;
            let pol = PulsePolarization { angle_deg, ellipticity };
            pol.validate(&at)?;
            pol
        }
    };
    f.finish()?;
    let mut p = Pulse { center_ps, fwhm_fs, peak_intensity_wcm2: 0.0, shape, rise_fs, cut_fs, polarization };
    let optics = match (intensity, energy) {
        (Some(i), None) => {
            let given = [("waist_um", waist_um), ("beam_radius_mm", beam_radius_mm), ("wavelength_nm", wavelength_nm), ("focal_length_mm", focal_length_mm)];
            if let Some((key, _)) = given.iter().find(|(_, v)| v.is_some()) {
                return Err(Error::input(join(path, key), "focusing keys go with the pulse energy (energy_mj), not with peak_intensity_wcm2"));
            }
            p.peak_intensity_wcm2 = i;
            None
        }
        (None, Some(e)) => {
            let focus = Focus { energy_mj: e, waist_um, beam_radius_mm, wavelength_nm, focal_length_mm, m2 };
            focus.validate(path)?;
            require_positive(&join(path, "fwhm_fs"), fwhm_fs, "fs")?;
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

fn parse_list<T>(v: Option<&Value>, path: &str, item: fn(&Value, &str) -> Result<T>) -> Result<Vec<T>> {
    match v {
        None => Ok(vec![]),
        Some(Value::Array(items)) => items.iter().enumerate().map(|(i, x)| item(x, &format!("{path}[{i}]"))).collect(),
        Some(other) => Err(Error::input(path, format!("expected an array, got {}", type_name(other)))),
    }
}

fn parse_two_colour(v: &Value, path: &str) -> Result<TwoColourPulse> {
    let mut f = Fields::new(v, path)?;
    let center_ps = f.req_f64("center_ps", "ps")?;
    let fwhm_fs = f.req_f64("fwhm_fs", "fs")?;
    let fundamental_intensity_wcm2 = f.req_f64("fundamental_intensity_wcm2", "W/cm²")?;
    let sh = f.opt_f64("second_harmonic_intensity_wcm2", "W/cm²")?;
    let ratio = f.opt_f64("second_harmonic_ratio", "second-harmonic to fundamental intensity ratio")?;
    let second_harmonic_intensity_wcm2 = match (sh, ratio) {
        (Some(i), None) => i,
        (None, Some(r)) => {
            if !(0.0..=10.0).contains(&r) {
                return Err(Error::input(join(path, "second_harmonic_ratio"), format!("expected a ratio from 0 to 10, got {r}")));
            }
            r * fundamental_intensity_wcm2
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
    let phase_rad = f.opt_f64("phase_rad", "rad")?.unwrap_or(0.0);
    let shape = match f.opt_str("shape", PulseShape::NAMES)? {
        None => PulseShape::Gaussian,
        Some(s) => PulseShape::parse(s).ok_or_else(|| Error::input(join(path, "shape"), format!("expected {}, got \"{s}\"", PulseShape::NAMES)))?,
    };
    f.finish()?;
    let t = TwoColourPulse { center_ps, fwhm_fs, fundamental_intensity_wcm2, second_harmonic_intensity_wcm2, phase_rad, shape };
    t.validate(path)?;
    Ok(t)
}

fn parse_terahertz(v: &Value, path: &str) -> Result<TerahertzPulse> {
    let mut f = Fields::new(v, path)?;
    let center_ps = f.req_f64("center_ps", "ps")?;
    let duration_fs = f.req_f64("duration_fs", "fs")?;
    let peak_field_kv_cm = f.req_f64("peak_field_kv_cm", "kV/cm")?;
    let waveform = match f.opt_str("waveform", "\"single_cycle\" or \"half_cycle\"")? {
        None | Some("single_cycle") => TerahertzWaveform::SingleCycle,
        Some("half_cycle") => TerahertzWaveform::HalfCycle,
        Some(other) => return Err(Error::input(join(path, "waveform"), format!("expected \"single_cycle\" or \"half_cycle\", got \"{other}\""))),
    };
    f.finish()?;
    let t = TerahertzPulse { center_ps, duration_fs, peak_field_kv_cm, waveform };
    t.validate(path)?;
    Ok(t)
}

/// Read a focal-averaging block found at `path`. Along the beam, each Rayleigh range is given in µm
/// (`pump_rayleigh_um`) or follows from the wavelength in nm and M² (`pump_wavelength_nm`, `pump_m2`).
pub fn parse_focal(v: &Value, path: &str) -> Result<FocalAverage> {
    let mut f = Fields::new(v, path)?;
    let d = 20usize;
    let mut a = FocalAverage::thin(
        f.req_f64("pump_waist_um", "µm")?,
        f.req_f64("probe_waist_um", "µm")?,
        f.opt_f64("probe_order", "probe nonlinearity order")?.unwrap_or(1.0),
        f.opt_usize("points", "quadrature points")?.unwrap_or(d),
    );
    a.sample_length_um = f.opt_f64("sample_length_um", "µm")?;
    let (pw, prw) = (a.pump_waist_um, a.probe_waist_um);
    a.pump_rayleigh_um = rayleigh_key(&mut f, path, "pump", pw)?;
    a.probe_rayleigh_um = rayleigh_key(&mut f, path, "probe", prw)?;
    f.finish()?;
    a.validate(path)?;
    Ok(a)
}

/// The Rayleigh range (µm) of the `beam` ("pump" or "probe"): `{beam}_rayleigh_um`, or from
/// `{beam}_wavelength_nm` and `{beam}_m2` with the waist `waist_um`.
fn rayleigh_key(f: &mut Fields, path: &str, beam: &str, waist_um: f64) -> Result<Option<f64>> {
    let zr = f.opt_f64(&format!("{beam}_rayleigh_um"), "µm")?;
    let wl = f.opt_f64(&format!("{beam}_wavelength_nm"), "nm")?;
    let m2 = f.opt_f64(&format!("{beam}_m2"), "beam quality factor M²")?;
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

fn parse_static(v: &Value, path: &str) -> Result<StaticField> {
    let mut f = Fields::new(v, path)?;
    let sf = StaticField { strength_kv_cm: f.req_f64("strength_kv_cm", "kV/cm")?, on_ps: f.opt_f64("on_ps", "ps")?, off_ps: f.opt_f64("off_ps", "ps")? };
    f.finish()?;
    sf.validate(path)?;
    Ok(sf)
}

fn parse_window(v: &Value, path: &str) -> Result<Window> {
    let mut f = Fields::new(v, path)?;
    let w = Window { start_ps: f.req_f64("start_ps", "ps")?, stop_ps: f.req_f64("stop_ps", "ps")?, step_fs: f.req_f64("step_fs", "fs")? };
    f.finish()?;
    w.validate(path)?;
    Ok(w)
}

fn parse_solver(v: &Value, path: &str) -> Result<SolverSettings> {
    let mut f = Fields::new(v, path)?;
    let d = SolverSettings::default();
    let method = match f.opt_str("method", "\"auto\", \"kick\" or \"finite\"")? {
        None | Some("auto") => Method::Auto,
        Some("kick") => Method::Kick,
        Some("finite") => Method::Finite,
        Some(other) => return Err(Error::input(join(path, "method"), format!("expected \"auto\", \"kick\" or \"finite\", got \"{other}\""))),
    };
    let s = SolverSettings {
        method,
        step_fs: f.opt_f64("step_fs", "fs")?,
        thermal_tolerance: f.opt_f64("thermal_tolerance", "population fraction")?.unwrap_or(d.thermal_tolerance),
        edge_tolerance: f.opt_f64("edge_tolerance", "population fraction")?.unwrap_or(d.edge_tolerance),
        both_parities: f.opt_bool("both_parities")?.unwrap_or(false),
        max_steps: f.opt_f64("max_steps", "time steps")?.unwrap_or(d.max_steps),
        max_states: f.opt_f64("max_states", "initial states")?,
        ..d
    };
    f.finish()?;
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

#[cfg(test)]
mod tests {
    use super::*;

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
        assert!(err(&GOOD.replace("\"temperature_k\"", "\"temperature\"")).starts_with("temperature_k: missing"));
        assert!(err(&GOOD.replace("\"fwhm_fs\":50", "\"fwhm_fs\":50,\"colour\":1")).starts_with("pulses[0].colour: unknown key"));
        assert!(err(&GOOD.replace("\"fwhm_fs\":50", "\"fwhm_fs\":\"50\"")).starts_with("pulses[0].fwhm_fs: expected a number"));
        assert!(err("{").starts_with("x: not valid JSON"));
        assert!(err("[]").starts_with("(top level): expected an object"));
    }
}
