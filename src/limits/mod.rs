//! Limits before buying optics: the best train for every pulse count, intensity ceiling and (optionally)
//! temperature or pulse duration, with a bound no train under the same ceiling can pass.
//!
//! One design search per (setting, ceiling) runs the counts 1..=N in order, each count's search seeded
//! with the previous count's design (as `design` does for "max_count"); the searches run in parallel,
//! those of one setting share their solvers (and so the cached operators), and every number recorded is
//! independent of thread timing, so a map equals the designs run one by one.

pub mod bound;

use crate::design::search::{Candidate, Confidence, Monitor, SearchSolvers, design_counts};
use crate::design::{Bounds, Objective};
use crate::error::{Error, Result};
use crate::goal::{GoalKind, Observable};
use crate::shard::Shard;
use bound::{BoundTable, KinematicBound};
use rayon::prelude::*;
use serde_json::Value;
use std::sync::Mutex;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

/// What to map.
#[derive(Debug, Clone, PartialEq)]
pub struct LimitsPlan {
    /// Pulse counts 1..=max_count.
    pub max_count: usize,
    /// Intensity ceilings, W/cm² (each pulse's peak intensity at most this).
    pub ceilings_wcm2: Vec<f64>,
    /// Temperatures, K (empty: the objective's).
    pub temperatures_k: Vec<f64>,
    /// Pulse durations (intensity FWHM), fs, fixed for every pulse (empty: the objective's bounds).
    pub durations_fs: Vec<f64>,
}

/// One panel of the map: a temperature and, when mapped, a pulse duration.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Setting {
    /// Temperature, K.
    pub temperature_k: f64,
    /// Every pulse's FWHM, fs (None: the objective's bounds).
    pub fwhm_fs: Option<f64>,
}

/// The best design of one combination.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct LimitCell {
    /// Index into [`LimitsMap::settings`].
    pub setting: usize,
    /// Intensity ceiling, W/cm².
    pub ceiling_wcm2: f64,
    /// Pulse count.
    pub count: usize,
    /// The design and its scores.
    pub design: Candidate,
    /// How sure the search is.
    pub confidence: Confidence,
    /// Wall seconds of this count's search.
    pub run_time_s: f64,
}

/// The bound for one combination (or why there is none).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct BoundCell {
    /// Index into [`LimitsMap::settings`].
    pub setting: usize,
    /// Intensity ceiling, W/cm².
    pub ceiling_wcm2: f64,
    /// Pulse count.
    pub count: usize,
    /// The bound.
    pub bound: KinematicBound,
}

/// The whole map.
#[derive(Debug, Clone)]
pub struct LimitsMap {
    /// The objective's design problem with the first setting, ceiling and the largest count.
    pub objective: Objective,
    /// Panels.
    pub settings: Vec<Setting>,
    /// Ceilings, ascending.
    pub ceilings_wcm2: Vec<f64>,
    /// Largest pulse count.
    pub max_count: usize,
    /// Finished designs, ordered by (setting, ceiling, count).
    pub cells: Vec<LimitCell>,
    /// Bounds, ordered as the cells would be (every combination).
    pub bounds: Vec<BoundCell>,
    /// Why no bound is given (None when `bounds` is filled).
    pub no_bound: Option<String>,
    /// True if the user stopped the map: some combinations are missing or stopped early.
    pub interrupted: bool,
    /// Wall seconds of the whole map.
    pub run_time_s: f64,
}

impl LimitsMap {
    /// The design of one combination, if it finished.
    pub fn cell(&self, setting: usize, ceiling: usize, count: usize) -> Option<&LimitCell> {
        let c = self.ceilings_wcm2[ceiling];
        self.cells.iter().find(|x| x.setting == setting && x.ceiling_wcm2 == c && x.count == count)
    }

    /// The bound of one combination, if any.
    pub fn bound(&self, setting: usize, ceiling: usize, count: usize) -> Option<&KinematicBound> {
        let c = self.ceilings_wcm2[ceiling];
        self.bounds.iter().find(|x| x.setting == setting && x.ceiling_wcm2 == c && x.count == count).map(|b| &b.bound)
    }

    /// Combinations asked for.
    pub fn planned(&self) -> usize {
        self.settings.len() * self.ceilings_wcm2.len() * self.max_count
    }
}

/// Receives the map's progress and can stop it.
pub trait LimitsMonitor: Sync {
    /// One combination (setting, ceiling, count) finished.
    fn combination_done(&self) {}
    /// True when the user asked to stop (searches then return what they have).
    fn interrupted(&self) -> bool {
        false
    }
}

/// A monitor that shows nothing and never stops.
pub struct Quiet;
impl LimitsMonitor for Quiet {}

/// The panels of a plan (temperature-major).
pub fn settings(obj: &Objective, plan: &LimitsPlan) -> Vec<Setting> {
    let temps = if plan.temperatures_k.is_empty() { vec![obj.base.temperature_k] } else { plan.temperatures_k.clone() };
    let durations: Vec<Option<f64>> = if plan.durations_fs.is_empty() { vec![None] } else { plan.durations_fs.iter().map(|&d| Some(d)).collect() };
    temps.iter().flat_map(|&t| durations.iter().map(move |&d| Setting { temperature_k: t, fwhm_fs: d })).collect()
}

/// Check a plan's lists; errors name the command-line option.
pub fn check_plan(plan: &LimitsPlan) -> Result<()> {
    if !(1..=8).contains(&plan.max_count) {
        return Err(Error::input("--max-count", format!("expected 1 to 8 pulses, got {}", plan.max_count)));
    }
    // (option, values, lowest allowed, whether the lowest value itself is allowed, highest, unit, required)
    let list = |name: &str, v: &[f64], lo: f64, lo_allowed: bool, hi: f64, unit: &str, required: bool| -> Result<()> {
        if required && v.is_empty() {
            return Err(Error::input(name, format!("missing; expected a comma-separated list in {unit}")));
        }
        if v.len() > 20 {
            return Err(Error::input(name, format!("expected at most 20 values, got {}", v.len())));
        }
        for &x in v {
            let low = if lo_allowed { x < lo } else { x <= lo };
            if !x.is_finite() || low || x > hi {
                let top = if hi >= 1e6 { format!("{hi:e}") } else { format!("{hi}") };
                let range = if lo_allowed { format!("from {lo} to {top}") } else { format!("above {lo} and at most {top}") };
                return Err(Error::input(name, format!("expected values {range} {unit}, got {x}")));
            }
        }
        let mut s = v.to_vec();
        s.sort_by(f64::total_cmp);
        if s.windows(2).any(|w| w[0] == w[1]) {
            return Err(Error::input(name, "expected distinct values"));
        }
        Ok(())
    };
    list("--ceilings", &plan.ceilings_wcm2, 0.0, false, 1e17, "W/cm²", true)?;
    list("--temperatures", &plan.temperatures_k, 0.0, true, 5000.0, "K", false)?;
    list("--durations", &plan.durations_fs, 0.0, false, 1e7, "fs", false)?;
    Ok(())
}

/// The objective of one (setting, ceiling) with counts 1..=`max_count`: the pulses' bounds are the
/// objective's (the last one repeated for added pulses), every pulse's intensity is capped at the ceiling,
/// and the temperature and duration are the setting's.
pub fn objective_for(obj: &Objective, setting: Setting, ceiling_wcm2: f64, max_count: usize) -> Result<Objective> {
    let mut o = obj.clone();
    o.base.temperature_k = setting.temperature_k;
    if max_count > 1 && o.space.pulses.len() == 1 {
        return Err(Error::input(
            "--max-count",
            "the objective has one pulse and no delay bounds; expected an objective with pulses.count ≥ 2 (its delay_ps bounds are used for every added pulse)",
        ));
    }
    while o.space.pulses.len() < max_count {
        let last = *o.space.pulses.last().expect("at least one pulse");
        o.space.pulses.push(last);
    }
    o.space.pulses.truncate(max_count);
    o.variable_count = true;
    o.space.max_peak_intensity_wcm2 = ceiling_wcm2;
    for p in &mut o.space.pulses {
        p.peak_intensity_wcm2 = Bounds { min: p.peak_intensity_wcm2.min.min(ceiling_wcm2), max: ceiling_wcm2 };
        if let Some(d) = setting.fwhm_fs {
            p.fwhm_fs = Bounds::fixed(d);
        }
    }
    o.validate().map_err(|e| match e {
        Error::Input { field, message } => Error::input(
            "--ceilings",
            format!(
                "{ceiling_wcm2:e} W/cm² with {max_count} pulses at {} K{}: {field}: {message}",
                setting.temperature_k,
                setting.fwhm_fs.map(|d| format!(", {d} fs")).unwrap_or_default()
            ),
        ),
        other => other,
    })?;
    Ok(o)
}

/// Why the objective gets no bound (None: it gets one).
pub fn bound_unavailable(obj: &Objective) -> Option<String> {
    if obj.molecule().as_linear().is_none() {
        return Some("the bound is worked out for linear molecules only".into());
    }
    if obj.goal.observable != Observable::Cos2 {
        return Some(format!("the bound covers ⟨cos²θ⟩ goals, not {}", obj.goal.observable.name()));
    }
    if obj.space.static_field_kv_cm.is_some() || obj.space.two_colour.is_some() || obj.space.terahertz.is_some() {
        return Some("the bound covers laser pulses alone (no static, two-colour or terahertz fields)".into());
    }
    let along_z = obj.space.pulses.iter().all(|p| p.angle_deg.is_fixed() && p.ellipticity.is_fixed() && p.angle_deg.min == 0.0 && p.ellipticity.min == 0.0);
    if !along_z {
        return Some("the bound covers pulses polarized along Z".into());
    }
    None
}

/// The bound for an objective with `count` pulses from the table of its temperature: the strongest
/// allowed pulse's kick strength (every parameter at its upper end) times the count.
fn bound_for(table: &BoundTable, obj: &Objective, count: usize) -> Result<KinematicBound> {
    let longest = obj.space.field(&vec![1.0; obj.space.dims()]);
    let da = obj.molecule().delta_alpha_a3();
    let strongest = longest.pulses.iter().map(|p| p.kick_strength(da).abs()).fold(0.0, f64::max);
    table.bound(strongest * count as f64, obj.goal.kind != GoalKind::Minimum)
}

/// Forwards a search's questions to the map's monitor and keeps when each count finished.
struct JobMonitor<'a> {
    map: &'a dyn LimitsMonitor,
    stop: &'a AtomicBool,
    finished: Mutex<Vec<Instant>>,
}

impl Monitor for JobMonitor<'_> {
    fn interrupted(&self) -> bool {
        self.stop.load(Ordering::Relaxed) || self.map.interrupted()
    }
    fn count_finished(&self, _count: usize) {
        self.finished.lock().expect("lock").push(Instant::now());
        self.map.combination_done();
    }
}

/// Run the map. Every (setting, ceiling) objective is built and checked before any search starts.
pub fn limits(obj: &Objective, plan: &LimitsPlan, monitor: &dyn LimitsMonitor) -> Result<LimitsMap> {
    limits_part(obj, plan, None, monitor)
}

/// [`limits`] for the (setting, ceiling) searches one part owns (numbered by setting, then ascending
/// ceiling), or all of them without `shard`; the bounds cover every combination. An empty part is a
/// map without cells.
pub fn limits_part(obj: &Objective, plan: &LimitsPlan, shard: Option<Shard>, monitor: &dyn LimitsMonitor) -> Result<LimitsMap> {
    check_plan(plan)?;
    let t0 = Instant::now();
    let mut ceilings = plan.ceilings_wcm2.clone();
    ceilings.sort_by(f64::total_cmp);
    let settings = settings(obj, plan);
    let mut jobs = vec![];
    for (si, &s) in settings.iter().enumerate() {
        for &c in &ceilings {
            jobs.push((si, c, objective_for(obj, s, c, plan.max_count)?));
        }
    }
    let no_bound = bound_unavailable(&jobs[0].2);
    let mut bounds = vec![];
    if no_bound.is_none() {
        let tables: Vec<BoundTable> = settings.iter().map(|s| BoundTable::new(obj.molecule(), s.temperature_k)).collect::<Result<_>>()?;
        for (si, c, o) in &jobs {
            for count in 1..=plan.max_count {
                bounds.push(BoundCell { setting: *si, ceiling_wcm2: *c, count, bound: bound_for(&tables[*si], o, count)? });
            }
        }
    }
    // One set of solvers per setting: the ceilings of a panel share their operators.
    let solvers: Vec<SearchSolvers> =
        settings.iter().enumerate().map(|(si, _)| SearchSolvers::new(&jobs.iter().find(|j| j.0 == si).expect("a job per setting").2)).collect::<Result<_>>()?;
    let stop = AtomicBool::new(false);
    let owned: Vec<&(usize, f64, Objective)> = jobs.iter().enumerate().filter(|(i, _)| shard.is_none_or(|s| s.owns(*i))).map(|(_, j)| j).collect();
    let outcomes: Vec<Result<Vec<LimitCell>>> = owned
        .par_iter()
        .map(|(si, c, o)| {
            if monitor.interrupted() {
                return Ok(vec![]);
            }
            let jm = JobMonitor { map: monitor, stop: &stop, finished: Mutex::new(vec![]) };
            let started = Instant::now();
            let r = match design_counts(o, &solvers[*si], &jm) {
                Ok(r) => r,
                Err(Error::Interrupted) => return Ok(vec![]),
                Err(e) => {
                    // One failed search stops the others: the map would be incomplete anyway.
                    stop.store(true, Ordering::Relaxed);
                    return Err(e);
                }
            };
            let finished = jm.finished.into_inner().expect("lock");
            let mut last = started;
            Ok(r.per_count
                .into_iter()
                .zip(r.confidence)
                .enumerate()
                .map(|(k, (design, confidence))| {
                    let end = finished.get(k).copied().unwrap_or_else(Instant::now);
                    let run_time_s = end.duration_since(last).as_secs_f64();
                    last = end;
                    LimitCell { setting: *si, ceiling_wcm2: *c, count: k + 1, design, confidence, run_time_s }
                })
                .collect())
        })
        .collect();
    let mut cells = vec![];
    for o in outcomes {
        cells.extend(o?);
    }
    let interrupted = monitor.interrupted() || cells.iter().any(|c| c.confidence.stopped_by == "interrupted") || cells.len() < owned.len() * plan.max_count;
    if cells.is_empty() && !owned.is_empty() {
        return Err(Error::Interrupted);
    }
    let objective = jobs.swap_remove(0).2;
    Ok(LimitsMap {
        objective,
        settings,
        ceilings_wcm2: ceilings,
        max_count: plan.max_count,
        cells,
        bounds,
        no_bound,
        interrupted,
        run_time_s: t0.elapsed().as_secs_f64(),
    })
}

impl LimitsMap {
    /// True when every search `shard` owns finished (of a map run by [`limits_part`]).
    pub fn part_complete(&self) -> bool {
        !self.interrupted
    }

    /// The part's designs and bounds as a part file holds them.
    pub fn part_value(&self) -> Value {
        serde_json::json!({"cells": self.cells, "bounds": self.bounds, "no_bound": self.no_bound, "run_time_s": self.run_time_s})
    }

    /// The map of a whole run from the results of its parts (any order, each from
    /// [`LimitsMap::part_value`]), with the objective and plan they were run with: every combination
    /// from exactly one part, one set of bounds.
    pub fn merge(obj: &Objective, plan: &LimitsPlan, parts: &[Value]) -> Result<LimitsMap> {
        check_plan(plan)?;
        let bad = |what: String| Error::input("parts", format!("the parts' limits results {what}"));
        let mut ceilings = plan.ceilings_wcm2.clone();
        ceilings.sort_by(f64::total_cmp);
        let settings = settings(obj, plan);
        let objective = objective_for(obj, settings[0], ceilings[0], plan.max_count)?;
        let first = parts.first().ok_or_else(|| bad("are empty".into()))?;
        let mut cells: Vec<LimitCell> = vec![];
        let mut run_time_s = 0.0;
        for p in parts {
            if p.get("bounds") != first.get("bounds") || p.get("no_bound") != first.get("no_bound") {
                return Err(bad("differ in their bounds".into()));
            }
            let part: Vec<LimitCell> =
                serde_json::from_value(p.get("cells").cloned().unwrap_or(Value::Null)).map_err(|e| bad(format!("cannot be read: {e}")))?;
            cells.extend(part);
            run_time_s += p.get("run_time_s").and_then(Value::as_f64).unwrap_or(0.0);
        }
        let key = |c: &LimitCell| (c.setting, ceilings.iter().position(|&x| x == c.ceiling_wcm2), c.count);
        if cells.iter().any(|c| key(c).1.is_none() || c.setting >= settings.len() || c.count == 0 || c.count > plan.max_count) {
            return Err(bad("hold a combination outside the plan".into()));
        }
        cells.sort_by_key(key);
        if cells.windows(2).any(|w| key(&w[0]) == key(&w[1])) {
            return Err(bad("hold a combination twice".into()));
        }
        let planned = settings.len() * ceilings.len() * plan.max_count;
        if cells.len() != planned {
            return Err(bad(format!("hold {} of {planned} combinations", cells.len())));
        }
        let bounds: Vec<BoundCell> =
            serde_json::from_value(first.get("bounds").cloned().unwrap_or(Value::Null)).map_err(|e| bad(format!("cannot be read: {e}")))?;
        let no_bound = first.get("no_bound").and_then(Value::as_str).map(str::to_string);
        Ok(LimitsMap { objective, settings, ceilings_wcm2: ceilings, max_count: plan.max_count, cells, bounds, no_bound, interrupted: false, run_time_s })
    }
}

/// The first count whose next pulse adds less than `gain` (in the goal's sense) for one (setting,
/// ceiling): where more pulses stop paying (None when every added pulse gains more, or counts are missing).
pub fn diminishing_returns(map: &LimitsMap, setting: usize, ceiling: usize, gain: f64) -> Option<usize> {
    let sense = map.objective.goal.sense();
    (1..map.max_count).find_map(|n| {
        let (a, b) = (map.cell(setting, ceiling, n)?, map.cell(setting, ceiling, n + 1)?);
        (sense * (b.design.full.value - a.design.full.value) < gain).then_some(n)
    })
}

/// Gain below which one more pulse is "not worth it" in the reports (absolute, in the observable).
pub const WORTH_ANOTHER_PULSE: f64 = 0.01;
