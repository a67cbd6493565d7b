//! The objective file format (what `design` reads): serde types that mirror the JSON (unknown keys
//! refused) and the conversion into an [`Objective`], whose own checks then run.

use super::scenario_file::{FocalFile, GoalFile, SolverFile, molecule};
use super::{join, read, unit_of};
use crate::design::{Bounds, DesignSpace, Effort, Objective, PulseBounds, SearchSettings, TerahertzBounds, TwoColourBounds};
use crate::error::{Error, Result};
use crate::field::{Pulse, PulseShape, TerahertzWaveform};
use crate::scenario::{Scenario, SolverSettings, Window};
use serde::de::{self, Deserializer, MapAccess, Visitor};
use serde::{Deserialize, Serialize};
use serde_json::Value;

/// An objective file.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ObjectiveFile {
    description: Option<String>,
    molecule: Option<Value>,
    temperature_k: f64,
    solver: Option<SolverFile>,
    pulses: Option<PulseSpaceFile>,
    max_peak_intensity_wcm2: f64,
    max_total_fluence_jcm2: Option<f64>,
    min_separation_ps: Option<f64>,
    max_ionized_fraction: Option<f64>,
    static_field_kv_cm: Option<BoundsFile>,
    static_field_angle_deg: Option<BoundsFile>,
    focal_average: Option<FocalFile>,
    terahertz: Option<TerahertzSpaceFile>,
    goal: Option<GoalFile>,
    search: Option<SearchFile>,
    robust: Option<RobustFile>,
}

/// A value searched over: a number (fixed) or `{"min": .., "max": ..}`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BoundsFile {
    min: f64,
    max: f64,
}

#[derive(Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
struct MinMax {
    min: f64,
    max: f64,
}

impl<'de> Deserialize<'de> for BoundsFile {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<BoundsFile, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = BoundsFile;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a number or {\"min\": .., \"max\": ..}")
            }
            fn visit_f64<E: de::Error>(self, x: f64) -> std::result::Result<BoundsFile, E> {
                Ok(BoundsFile { min: x, max: x })
            }
            fn visit_u64<E: de::Error>(self, x: u64) -> std::result::Result<BoundsFile, E> {
                self.visit_f64(x as f64)
            }
            fn visit_i64<E: de::Error>(self, x: i64) -> std::result::Result<BoundsFile, E> {
                self.visit_f64(x as f64)
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> std::result::Result<BoundsFile, A::Error> {
                let m = MinMax::deserialize(de::value::MapAccessDeserializer::new(map))?;
                Ok(BoundsFile { min: m.min, max: m.max })
            }
        }
        d.deserialize_any(V)
    }
}

impl BoundsFile {
    /// The range, checked (max ≥ min) with errors under `path`.
    fn bounds(self, path: &str) -> Result<Bounds> {
        if self.max < self.min {
            let unit = unit_of(path).unwrap_or("units of the key");
            return Err(Error::input(join(path, "max"), format!("expected max ≥ min = {} ({unit}), got {}", self.min, self.max)));
        }
        Ok(Bounds { min: self.min, max: self.max })
    }
}

fn bounds(b: Option<BoundsFile>, path: &str) -> Result<Option<Bounds>> {
    b.map(|b| b.bounds(path)).transpose()
}

/// The pulse trains searched.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct PulseSpaceFile {
    count: Option<usize>,
    max_count: Option<usize>,
    #[serde(default)]
    shape: PulseShape,
    rise_fs: Option<f64>,
    cut_fs: Option<BoundsFile>,
    fwhm_fs: Option<BoundsFile>,
    delay_ps: Option<BoundsFile>,
    peak_intensity_wcm2: Option<BoundsFile>,
    polarization: Option<PolarizationBoundsFile>,
    two_colour: Option<TwoColourSpaceFile>,
    each: Option<Vec<EachFile>>,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
struct PolarizationBoundsFile {
    angle_deg: Option<BoundsFile>,
    ellipticity: Option<BoundsFile>,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
struct TwoColourSpaceFile {
    second_harmonic_ratio: Option<BoundsFile>,
    phase_rad: Option<BoundsFile>,
}

/// Bounds of one pulse of the train, overriding the template.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
struct EachFile {
    delay_ps: Option<BoundsFile>,
    peak_intensity_wcm2: Option<BoundsFile>,
    fwhm_fs: Option<BoundsFile>,
    polarization: Option<PolarizationBoundsFile>,
    cut_fs: Option<BoundsFile>,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
struct TerahertzSpaceFile {
    delay_ps: Option<BoundsFile>,
    peak_field_kv_cm: Option<BoundsFile>,
    duration_fs: f64,
    #[serde(default)]
    waveform: TerahertzWaveform,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
struct SearchFile {
    seed: Option<u64>,
    #[serde(default)]
    effort: Effort,
    swarm_size: Option<usize>,
    iterations: Option<usize>,
    starts: Option<usize>,
    max_starts: Option<usize>,
    refine_candidates: Option<usize>,
    refine_iterations: Option<usize>,
    agreement: Option<f64>,
    time_limit_s: Option<f64>,
}

#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(deny_unknown_fields)]
struct RobustFile {
    jitter_fs: Option<f64>,
    energy_noise_percent: Option<f64>,
    phase_noise_rad: Option<f64>,
    samples: Option<usize>,
}

fn missing(key: &str, what: &str) -> Error {
    Error::input(key, format!("missing; expected {what}"))
}

/// Read an objective from a parsed JSON document.
pub fn objective(v: &Value) -> Result<Objective> {
    let file: ObjectiveFile = read(v, "")?;
    let mv = file.molecule.as_ref().ok_or_else(|| missing("molecule", "a library name or an object with b_cm, alpha_parallel_a3, ..."))?;
    let (molecule, molecule_source) = molecule(mv, "molecule")?;
    let solver = match &file.solver {
        None => SolverSettings::default(),
        Some(s) => s.settings("solver")?,
    };
    let focal_average = file.focal_average.as_ref().map(|f| f.average("focal_average")).transpose()?;
    // The base scenario: molecule, temperature and solver settings; each design replaces its field and window.
    let base = Scenario {
        description: None,
        molecule,
        molecule_source,
        temperature_k: file.temperature_k,
        field: Default::default(),
        window: Window { start_ps: 0.0, stop_ps: 1.0, step_fs: 10.0 },
        solver,
        goal: None,
        pulse_optics: vec![],
        focal_average,
    };
    base.validate()?;
    let pulses = file.pulses.as_ref().ok_or_else(|| missing("pulses", "an object with count or max_count and the bounds of each pulse"))?;
    let (mut space, variable_count) =
        pulses.space("pulses", file.max_peak_intensity_wcm2, file.max_total_fluence_jcm2, file.min_separation_ps.unwrap_or(0.0))?;
    if let Some(limit) = file.max_ionized_fraction {
        crate::design::apply_ionization_limit(&mut space, &base.molecule, limit)?;
    }
    if let Some(b) = bounds(file.static_field_kv_cm, "static_field_kv_cm")? {
        if b.min.abs().max(b.max.abs()) > 1e4 {
            return Err(Error::input("static_field_kv_cm", "expected at most 1e4 kV/cm in magnitude"));
        }
        space.static_field_kv_cm = Some(b);
    }
    if let Some(b) = bounds(file.static_field_angle_deg, "static_field_angle_deg")? {
        if space.static_field_kv_cm.is_none() {
            return Err(Error::input("static_field_angle_deg", "an angle needs a static field: give static_field_kv_cm too"));
        }
        if b.min.abs().max(b.max.abs()) > 360.0 {
            return Err(Error::input("static_field_angle_deg", "expected degrees from -360 to 360"));
        }
        space.static_field_angle_deg = Some(b);
    }
    if let Some(t) = &file.terahertz {
        let delay_ps = bounds(t.delay_ps, "terahertz.delay_ps")?
            .ok_or_else(|| missing("terahertz.delay_ps", "ps after the last laser pulse centre, a number or {min, max}"))?;
        let peak_field_kv_cm =
            bounds(t.peak_field_kv_cm, "terahertz.peak_field_kv_cm")?.ok_or_else(|| missing("terahertz.peak_field_kv_cm", "kV/cm, a number or {min, max}"))?;
        if delay_ps.min.abs().max(delay_ps.max.abs()) > 1e5 {
            return Err(Error::input("terahertz.delay_ps", "expected delays within ±1e5 ps"));
        }
        space.terahertz = Some(TerahertzBounds { delay_ps, peak_field_kv_cm, duration_fs: t.duration_fs, waveform: t.waveform });
    }
    space.validate("")?;
    let goal = file.goal.as_ref().ok_or_else(|| missing("goal", "an object with kind, observable and window_ps"))?.goal("goal")?;
    let search = match &file.search {
        None => SearchSettings::default(),
        Some(s) => s.settings("search")?,
    };
    let robust = file.robust.map(|r| r.noise("robust")).transpose()?;
    let obj = Objective { description: file.description, base, space, variable_count, goal, search, robust };
    obj.validate()?;
    Ok(obj)
}

impl PulseSpaceFile {
    fn space(&self, path: &str, ceiling: f64, budget: Option<f64>, min_sep: f64) -> Result<(DesignSpace, bool)> {
        let (n, variable) = match (self.count, self.max_count) {
            (Some(c), None) => (c, false),
            (None, Some(m)) => (m, true),
            (Some(_), Some(_)) => return Err(Error::input(join(path, "max_count"), "give either count or max_count, not both")),
            (None, None) => return Err(missing(&join(path, "count"), "count (fixed number of pulses) or max_count (up to N)")),
        };
        if n == 0 || n > 12 {
            return Err(Error::input(join(path, if variable { "max_count" } else { "count" }), format!("expected 1 to 12 pulses, got {n}")));
        }
        let at = |key: &str| join(path, key);
        let cut_fs = bounds(self.cut_fs, &at("cut_fs"))?.unwrap_or(Bounds::fixed(0.0));
        let fwhm = bounds(self.fwhm_fs, &at("fwhm_fs"))?.ok_or_else(|| missing(&at("fwhm_fs"), "a duration in fs or {min, max}"))?;
        let delay = match bounds(self.delay_ps, &at("delay_ps"))? {
            Some(d) => d,
            None if n > 1 => return Err(missing(&at("delay_ps"), "{\"min\": .., \"max\": ..} in ps between consecutive pulses")),
            None => Bounds::fixed(0.0),
        };
        let inten = bounds(self.peak_intensity_wcm2, &at("peak_intensity_wcm2"))?.unwrap_or(Bounds { min: 0.0, max: ceiling });
        let (angle_deg, ellipticity) = match &self.polarization {
            Some(p) => p.bounds(&at("polarization"))?,
            None => (Bounds::fixed(0.0), Bounds::fixed(0.0)),
        };
        let mut pulses = vec![PulseBounds { delay_ps: delay, peak_intensity_wcm2: inten, fwhm_fs: fwhm, angle_deg, ellipticity, cut_fs }; n];
        let two_colour = match &self.two_colour {
            None => None,
            Some(t) => {
                let p = at("two_colour");
                let ratio = bounds(t.second_harmonic_ratio, &join(&p, "second_harmonic_ratio"))?
                    .ok_or_else(|| missing(&join(&p, "second_harmonic_ratio"), "a ratio or {min, max}"))?;
                let phase_rad = bounds(t.phase_rad, &join(&p, "phase_rad"))?.unwrap_or(Bounds { min: 0.0, max: 2.0 * std::f64::consts::PI });
                if ratio.min < 0.0 || ratio.max > 10.0 {
                    return Err(Error::input(join(&p, "second_harmonic_ratio"), format!("expected ratios from 0 to 10, got [{}, {}]", ratio.min, ratio.max)));
                }
                Some(TwoColourBounds { ratio, phase_rad })
            }
        };
        if let Some(items) = &self.each {
            if items.len() > n {
                return Err(Error::input(at("each"), format!("expected at most {n} entries (one per pulse), got {}", items.len())));
            }
            for (k, item) in items.iter().enumerate() {
                let pp = format!("{}[{k}]", at("each"));
                if let Some(d) = bounds(item.delay_ps, &join(&pp, "delay_ps"))? {
                    if k == 0 {
                        return Err(Error::input(join(&pp, "delay_ps"), "the first pulse defines t = 0 and has no delay"));
                    }
                    pulses[k].delay_ps = d;
                }
                if let Some(i) = bounds(item.peak_intensity_wcm2, &join(&pp, "peak_intensity_wcm2"))? {
                    pulses[k].peak_intensity_wcm2 = i;
                }
                if let Some(w) = bounds(item.fwhm_fs, &join(&pp, "fwhm_fs"))? {
                    pulses[k].fwhm_fs = w;
                }
                if let Some(p) = &item.polarization {
                    (pulses[k].angle_deg, pulses[k].ellipticity) = p.bounds(&join(&pp, "polarization"))?;
                }
                if let Some(c) = bounds(item.cut_fs, &join(&pp, "cut_fs"))? {
                    pulses[k].cut_fs = c;
                }
            }
        }
        let space = DesignSpace {
            shape: self.shape,
            rise_fs: self.rise_fs,
            pulses,
            max_peak_intensity_wcm2: ceiling,
            max_total_fluence_jcm2: budget,
            min_separation_ps: min_sep,
            static_field_kv_cm: None,
            static_field_angle_deg: None,
            two_colour,
            terahertz: None,
        };
        // Check each pulse shape through the pulse validator at the corners of its bounds (rise vs FWHM,
        // switch-off within ±2 FWHM of the peak and only for truncated pulses). Errors name the template
        // (`pulses.cut_fs`) or the pulse's entry under `each`.
        for (k, p) in space.pulses.iter().enumerate() {
            let at = if p.cut_fs != cut_fs { format!("{}[{k}]", join(path, "each")) } else { path.to_string() };
            for w in [p.fwhm_fs.min, p.fwhm_fs.max] {
                for c in [p.cut_fs.min, p.cut_fs.max] {
                    let cut = (c != 0.0 || !p.cut_fs.is_fixed()).then_some(c);
                    let pulse = Pulse {
                        center_ps: 0.0,
                        fwhm_fs: w,
                        peak_intensity_wcm2: 0.0,
                        shape: self.shape,
                        rise_fs: self.rise_fs,
                        cut_fs: cut,
                        polarization: Default::default(),
                    };
                    pulse.validate(&at)?;
                }
            }
        }
        Ok((space, variable))
    }
}

impl PolarizationBoundsFile {
    /// Bounds of the angle (degrees) and the ellipticity.
    fn bounds(&self, path: &str) -> Result<(Bounds, Bounds)> {
        let angle = bounds(self.angle_deg, &join(path, "angle_deg"))?.unwrap_or(Bounds::fixed(0.0));
        let ell = bounds(self.ellipticity, &join(path, "ellipticity"))?.unwrap_or(Bounds::fixed(0.0));
        if !angle.min.is_finite() || !angle.max.is_finite() || angle.max - angle.min > 360.0 {
            return Err(Error::input(
                join(path, "angle_deg"),
                format!("expected finite angles spanning at most 360 degrees, got [{}, {}]", angle.min, angle.max),
            ));
        }
        if !(0.0..=1.0).contains(&ell.min) || !(0.0..=1.0).contains(&ell.max) {
            return Err(Error::input(
                join(path, "ellipticity"),
                format!("expected minor-to-major field ratios between 0 and 1, got [{}, {}]", ell.min, ell.max),
            ));
        }
        Ok((angle, ell))
    }
}

impl SearchFile {
    fn settings(&self, path: &str) -> Result<SearchSettings> {
        let d = SearchSettings::default();
        let s = SearchSettings {
            seed: self.seed.unwrap_or(d.seed),
            effort: self.effort,
            swarm_size: self.swarm_size,
            iterations: self.iterations,
            starts: self.starts,
            max_starts: self.max_starts,
            refine_candidates: self.refine_candidates,
            refine_iterations: self.refine_iterations,
            agreement: self.agreement.unwrap_or(d.agreement),
            time_limit_s: self.time_limit_s,
        };
        for (name, val, lo, hi) in [
            ("swarm_size", s.swarm_size, 2, 10_000),
            ("iterations", s.iterations, 1, 100_000),
            ("starts", s.starts, 1, 100),
            ("max_starts", s.max_starts, 1, 100),
            ("refine_candidates", s.refine_candidates, 1, 100),
            ("refine_iterations", s.refine_iterations, 0, 100_000),
        ] {
            if let Some(val) = val
                && (val < lo || val > hi)
            {
                return Err(Error::input(join(path, name), format!("expected a whole number from {lo} to {hi}, got {val}")));
            }
        }
        if !(s.agreement > 0.0 && s.agreement <= 0.1) {
            return Err(Error::input(
                join(path, "agreement"),
                format!("expected a tolerance above 0 and at most 0.1 (units of the observable), got {}", s.agreement),
            ));
        }
        if let Some(t) = s.time_limit_s
            && !(t > 0.0 && t <= 1e7)
        {
            return Err(Error::input(join(path, "time_limit_s"), format!("expected a time above 0 and at most 1e7 s, got {t}")));
        }
        Ok(s)
    }
}

impl RobustFile {
    fn noise(self, path: &str) -> Result<(crate::tolerance::Noise, usize)> {
        let noise = crate::tolerance::Noise {
            jitter_fs: self.jitter_fs.unwrap_or(0.0),
            energy_percent: self.energy_noise_percent.unwrap_or(0.0),
            phase_rad: self.phase_noise_rad.unwrap_or(0.0),
        };
        let samples = self.samples.unwrap_or(16);
        for (name, x) in [("jitter_fs", noise.jitter_fs), ("energy_noise_percent", noise.energy_percent), ("phase_noise_rad", noise.phase_rad)] {
            if x < 0.0 {
                return Err(Error::input(join(path, name), format!("expected an rms value ≥ 0, got {x}")));
            }
        }
        if noise.energy_percent > 50.0 {
            return Err(Error::input(join(path, "energy_noise_percent"), "expected at most 50 %"));
        }
        if !(2..=1000).contains(&samples) {
            return Err(Error::input(join(path, "samples"), format!("expected 2 to 1000 samples, got {samples}")));
        }
        Ok((noise, samples))
    }
}
