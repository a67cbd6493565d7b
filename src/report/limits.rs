//! Outputs of a limits map: the table the command line prints, `limits.csv`, `limits.svg` (one panel
//! per temperature or duration) and the note of a map stopped early.

use super::svg;
use crate::limits::{LimitsMap, Setting, WORTH_ANOTHER_PULSE, diminishing_returns};
use std::fmt::Write;

/// Pulse energy (mJ) that gives `intensity_wcm2` at the focus of waist `waist_um` for a pulse whose
/// power envelope has area `envelope_area_ps` (the inverse of `optics::peak_intensity_wcm2`).
pub fn energy_mj_for(intensity_wcm2: f64, envelope_area_ps: f64, waist_um: f64) -> f64 {
    let per_mj = crate::optics::peak_intensity_wcm2(crate::optics::peak_power_w(1.0, envelope_area_ps), waist_um * 1e-6);
    intensity_wcm2 / per_mj
}

/// The focus the map's energies refer to: a 1/e² waist in µm (None: no energies reported).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EnergyScale {
    /// 1/e² intensity radius at the focus, µm.
    pub waist_um: f64,
}

impl EnergyScale {
    /// Energy (mJ) of one pulse at `ceiling` in panel `setting` (its longest allowed pulse).
    pub fn energy_mj(&self, map: &LimitsMap, setting: usize, ceiling: f64) -> f64 {
        let o = crate::limits::objective_for(&map.objective, map.settings[setting], ceiling, 1).ok();
        let area = o.map(|o| o.space.field(&vec![1.0; o.space.dims()]).pulses.iter().map(|p| p.envelope_area_ps()).fold(0.0, f64::max)).unwrap_or(f64::NAN);
        energy_mj_for(ceiling, area, self.waist_um)
    }
}

/// A pulse energy in mJ with three significant digits ("0.0402 mJ", "2.10 mJ").
fn energy_text(mj: f64) -> String {
    if !(mj.is_finite() && mj > 0.0) {
        return "—".into();
    }
    let decimals = (2 - mj.log10().floor() as i64).max(0) as usize;
    format!("{mj:.decimals$} mJ")
}

/// A length without float noise ("50", "12.5").
fn plain(x: f64) -> String {
    let t = format!("{x:.4}");
    t.trim_end_matches('0').trim_end_matches('.').to_string()
}

fn setting_label(s: &Setting) -> String {
    format!("{} K{}", s.temperature_k, s.fwhm_fs.map(|d| format!(", {d} fs pulses")).unwrap_or_default())
}

/// "partial: …" when the map was stopped before its end.
pub fn limits_partial(map: &LimitsMap) -> Option<String> {
    map.interrupted.then(|| {
        format!(
            "partial: stopped by a signal; {} of {} combinations finished (searches stopped early are marked \"interrupted\")",
            map.cells.iter().filter(|c| c.confidence.stopped_by != "interrupted").count(),
            map.planned()
        )
    })
}

/// PARTIAL.txt of a stopped map.
pub fn limits_partial_note(partial: &str) -> String {
    format!("{partial}\nRun the same command again to compute the whole map.\n")
}

/// `limits.csv`: one row per finished combination.
pub fn limits_csv(map: &LimitsMap, energy: Option<EnergyScale>) -> String {
    let goal = &map.objective.goal;
    let mut csv = format!(
        "temperature_k,fwhm_fs,ceiling_wcm2,{}count,score_{}_{},t_ps,kick_model_score,bound,starts,agreeing_starts,spread,stopped_by,run_time_s",
        if energy.is_some() { "pulse_energy_mj," } else { "" },
        goal.kind_name(),
        goal.observable.name()
    );
    for k in 1..=map.max_count {
        let _ = write!(csv, ",pulse{k}_center_ps,pulse{k}_intensity_wcm2,pulse{k}_fwhm_fs");
    }
    csv.push('\n');
    for c in &map.cells {
        let s = map.settings[c.setting];
        let ci = map.ceilings_wcm2.iter().position(|&x| x == c.ceiling_wcm2).expect("ceiling of the map");
        let bound = map.bound(c.setting, ci, c.count).map(|b| format!("{:.6}", b.value)).unwrap_or_default();
        let _ = write!(
            csv,
            "{},{},{:e},{}{},{:.6},{},{},{},{},{},{:.6},{},{:.2}",
            s.temperature_k,
            s.fwhm_fs.map(|d| d.to_string()).unwrap_or_default(),
            c.ceiling_wcm2,
            energy
                .map(|e| {
                    let mj = e.energy_mj(map, c.setting, c.ceiling_wcm2);
                    if mj.is_finite() { format!("{mj:.4},") } else { ",".to_string() }
                })
                .unwrap_or_default(),
            c.count,
            c.design.full.value,
            c.design.full.t_ps.map(|t| format!("{t:.4}")).unwrap_or_default(),
            c.design.kick.map(|k| format!("{:.6}", k.value)).unwrap_or_default(),
            bound,
            c.confidence.starts.len(),
            c.confidence.agreeing,
            c.confidence.spread,
            c.confidence.stopped_by,
            c.run_time_s
        );
        for k in 0..map.max_count {
            match c.design.field.pulses.get(k) {
                Some(p) => {
                    let _ = write!(csv, ",{:.4},{:.4e},{}", p.center_ps, p.peak_intensity_wcm2, p.fwhm_fs);
                }
                None => csv.push_str(",,,"),
            }
        }
        csv.push('\n');
    }
    csv
}

/// The table printed on screen: per panel, score by ceiling (rows) and count (columns), the bound of
/// the largest count, and where one more pulse stops adding WORTH_ANOTHER_PULSE.
pub fn limits_text(map: &LimitsMap, energy: Option<EnergyScale>) -> String {
    let goal = &map.objective.goal;
    let mut out = format!(
        "{}: best {} of {} by pulse count and intensity ceiling (full solver)\n",
        map.objective.molecule().name,
        goal.kind_name(),
        goal.observable.name()
    );
    for (si, s) in map.settings.iter().enumerate() {
        let _ = writeln!(out, "\n  {}", setting_label(s));
        let _ = write!(out, "  {:>12}", "ceiling");
        if energy.is_some() {
            let _ = write!(out, " {:>10}", "energy");
        }
        for n in 1..=map.max_count {
            let _ = write!(out, " {:>8}", format!("{n} pulse{}", if n == 1 { "" } else { "s" }));
        }
        let _ = writeln!(out, " {:>8}  more pulses stop paying", "bound");
        for (ci, &c) in map.ceilings_wcm2.iter().enumerate() {
            let _ = write!(out, "  {:>12}", format!("{c:.2e}"));
            if let Some(e) = energy {
                let _ = write!(out, " {:>10}", energy_text(e.energy_mj(map, si, c)));
            }
            for n in 1..=map.max_count {
                let v = map.cell(si, ci, n).map(|x| format!("{:.4}{}", x.design.full.value, if x.confidence.warning.is_some() { "?" } else { "" }));
                let _ = write!(out, " {:>8}", v.unwrap_or_else(|| "—".into()));
            }
            let b = map.bound(si, ci, map.max_count).map(|b| format!("{:.4}", b.value)).unwrap_or_else(|| "—".into());
            let dr = match diminishing_returns(map, si, ci, WORTH_ANOTHER_PULSE) {
                Some(n) => format!("after {n} (pulse {} adds < {WORTH_ANOTHER_PULSE})", n + 1),
                None if map.max_count == 1 => "—".into(),
                None => "not within this map".into(),
            };
            let _ = writeln!(out, " {b:>8}  {dr}");
        }
    }
    match &map.no_bound {
        Some(why) => {
            let _ = writeln!(out, "\n  no bound: {why}");
        }
        None => {
            let _ = writeln!(out, "\n  bound: no train of {} pulses under the ceiling can pass it (any timing, any shape; see docs/physics.md)", map.max_count);
        }
    }
    if map.cells.iter().any(|c| c.confidence.warning.is_some()) {
        let _ = writeln!(out, "  ?: fewer than three independent starts agreed on this design (see starts and agreeing_starts in limits.csv)");
    }
    if let Some(e) = energy {
        let _ = writeln!(out, "  energy: per pulse for a {} µm focus (1/e² radius), on axis", plain(e.waist_um));
    }
    let n = map.cells.len();
    let _ = writeln!(out, "  {n} combination{} in {:.1} s", if n == 1 { "" } else { "s" }, map.run_time_s);
    out
}

/// `limits.svg`: one panel per setting (one y range for all), the score against the ceiling, a line per
/// pulse count and the bound of the largest count dashed, with the laser-safety caution.
pub fn limits_svg(map: &LimitsMap, energy: Option<EnergyScale>, partial: Option<&str>) -> String {
    let goal = &map.objective.goal;
    let counts_color = |n: usize| if n == 1 { svg::INK } else { svg::PALETTE[(n - 2) % svg::PALETTE.len()] };
    // One y range for every panel, so temperatures and durations compare at a glance.
    let values = map.cells.iter().map(|c| c.design.full.value).chain(map.bounds.iter().filter(|b| b.count == map.max_count).map(|b| b.bound.value));
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
    let pad = 0.04 * (hi - lo).max(0.05);
    let y_range = (lo.is_finite() && hi.is_finite()).then_some((lo - pad, hi + pad));
    let mut panels = vec![];
    for (si, s) in map.settings.iter().enumerate() {
        let mut plot = svg::LinePlot::new(
            format!("{}, {}: best train per pulse count", map.objective.molecule().name, setting_label(s)),
            "peak intensity ceiling per pulse (W/cm²)",
            format!("best {} of {}", goal.kind_name(), goal.observable.name()),
        );
        let top = map.ceilings_wcm2.len() - 1;
        let mut sub = vec![];
        if let Some(e) = energy {
            plot.x_label = format!("ceiling per pulse (W/cm²); top: energy at a {} µm focus", plain(e.waist_um));
        }
        if let Some(p) = partial {
            sub.push(p.to_string());
        }
        sub.push(super::LASER_SAFETY_SHORT.to_string());
        plot.subtitle = (!sub.is_empty()).then(|| sub.join("; "));
        for n in 1..=map.max_count {
            let pts: Vec<(f64, f64)> =
                (0..map.ceilings_wcm2.len()).filter_map(|ci| map.cell(si, ci, n).map(|c| (map.ceilings_wcm2[ci], c.design.full.value))).collect();
            if pts.is_empty() {
                continue;
            }
            let gain = match (map.cell(si, top, n), map.cell(si, top, n.saturating_sub(1).max(1))) {
                (Some(a), Some(b)) if n > 1 => {
                    format!(" ({:+.3} at {:.0e})", goal.sense() * (a.design.full.value - b.design.full.value), map.ceilings_wcm2[top])
                }
                _ => String::new(),
            };
            let label = if n == 1 { "1 pulse (baseline)".to_string() } else { format!("{n} pulses{gain}") };
            plot.series.push(
                svg::Series::new(label, pts.iter().map(|p| p.0).collect(), pts.iter().map(|p| p.1).collect())
                    .with_color(counts_color(n))
                    .with_width(if n == 1 { 2.4 } else { 1.8 }),
            );
        }
        let bound: Vec<(f64, f64)> =
            (0..map.ceilings_wcm2.len()).filter_map(|ci| map.bound(si, ci, map.max_count).map(|b| (map.ceilings_wcm2[ci], b.value))).collect();
        if !bound.is_empty() {
            plot.series.push(
                svg::Series::new(format!("bound, {} pulses", map.max_count), bound.iter().map(|p| p.0).collect(), bound.iter().map(|p| p.1).collect())
                    .with_color(svg::NEUTRAL)
                    .with_dashed(true)
                    .with_width(1.6),
            );
        }
        if let Some(e) = energy {
            for &c in &map.ceilings_wcm2 {
                plot.markers.push(svg::Marker::line(c, energy_text(e.energy_mj(map, si, c)), svg::NEUTRAL_LIGHT));
            }
        }
        plot.height = 460.0;
        plot.y_range = y_range;
        panels.push(plot.to_svg());
    }
    svg::stack_vertically(&panels)
}
