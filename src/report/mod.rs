//! Reports: the summary (JSON), traces (CSV) and plots (SVG) written to an output folder.

pub mod design;
pub mod limits;
pub mod output;
pub mod scan;
pub mod svg;
pub mod text;

use crate::error::{Error, Result};
use crate::molecule::Rotor;
use crate::observe::{Extremum, Trace};
use crate::scenario::Scenario;
use crate::simulate::{Event, Simulation};
use crate::units::revival_period_ps;
use serde_json::{Value, json};
use std::path::Path;

/// The laser-safety caution printed with every output that states intensities or pulse energies.
pub const LASER_SAFETY: &str = "Laser safety: pulses like these come from class 4 lasers (terahertz pulses from sources they pump). \
Follow your local laser safety officer and the applicable standards (IEC 60825-1, ANSI Z136.1); \
these numbers are no substitute for a safety assessment.";

/// The caution in one line, for plot subtitles.
pub const LASER_SAFETY_SHORT: &str = "Laser safety: class 4; follow your laser safety officer, IEC 60825-1, ANSI Z136.1";

fn extremum(e: Option<Extremum>) -> Value {
    match e {
        Some(e) if e.value.is_finite() => json!({"value": e.value, "t_ps": e.t_ps}),
        _ => Value::Null,
    }
}

/// Number or null (never NaN in an output).
pub fn num(x: f64) -> Value {
    if x.is_finite() { json!(x) } else { Value::Null }
}

/// The method used for each pulse ("kick" or "finite"), indexed like the scenario's pulses.
pub fn pulse_methods(events: &[Event], n_pulses: usize) -> Vec<&'static str> {
    let mut out = vec!["off"; n_pulses];
    for e in events {
        match e {
            Event::Kick { pulse, .. } => out[*pulse] = "kick",
            Event::Finite { pulses, .. } => pulses.iter().for_each(|&p| out[p] = "finite"),
        }
    }
    out
}

/// The summary of a simulation as JSON: peaks, permanent alignment, revival period, kicks, basis, timing.
pub fn simulation_summary(sim: &Simulation) -> Value {
    let s = &sim.scenario;
    let r = &sim.result;
    let tr = &r.trace;
    let da = s.molecule.delta_alpha_a3();
    let methods = pulse_methods(&r.events, s.field.pulses.len());
    let pulses: Vec<Value> = s
        .field
        .pulses
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let mut v = json!({
                "center_ps": p.center_ps, "fwhm_fs": p.fwhm_fs, "peak_intensity_wcm2": p.peak_intensity_wcm2,
                "shape": p.shape, "kick_strength": p.kick_strength(da), "method": methods[i],
                "polarization": p.polarization,
            });
            if let Some(c) = p.cut_fs {
                v["cut_fs"] = num(c);
            }
            if let Some(ip) = s.molecule.ionization_energy_ev {
                v["ionized_fraction_adk"] = num(crate::optics::ionization::ionized_fraction(p, ip));
            }
            if let Some(Some(o)) = s.pulse_optics.get(i) {
                v["energy_mj"] = json!(o.energy_mj);
                v["waist_um"] = json!(o.waist_m() * 1e6);
                v["peak_power_w"] = json!(crate::optics::peak_power_w(o.energy_mj, p.envelope_area_ps()));
                v["rayleigh_range_mm"] = json!(o.rayleigh_range_mm());
            }
            v
        })
        .collect();
    let after = s.field.last_pulse_end_ps().unwrap_or(f64::NEG_INFINITY);
    let steps: Vec<Value> = r
        .events
        .iter()
        .map(|e| match e {
            Event::Kick { t_ps, strength, pulse } => json!({"kind": "kick", "t_ps": t_ps, "kick_strength": strength, "pulse": pulse}),
            Event::Finite { start_ps, end_ps, pulses, step_ps } => {
                json!({"kind": "finite", "start_ps": start_ps, "end_ps": end_ps, "pulses": pulses, "step_fs": step_ps * 1000.0})
            }
        })
        .collect();
    let max_edge = r.blocks.iter().map(|b| b.edge_population).fold(0.0, f64::max);
    json!({
        "kicktrain_version": env!("CARGO_PKG_VERSION"),
        "description": s.description,
        "molecule": match &s.molecule.rotor {
            Rotor::Linear(l) => json!({"name": s.molecule.name, "b_cm": l.b_cm, "d_cm": l.d_cm,
                "delta_alpha_a3": da, "spin_weights_even_odd": l.spin_weights}),
            Rotor::Top(t) => json!({"name": s.molecule.name, "rotor": match t.kind() {
                    crate::molecule::top::TopKind::Prolate => "prolate symmetric top",
                    crate::molecule::top::TopKind::Oblate => "oblate symmetric top",
                    crate::molecule::top::TopKind::Asymmetric => "asymmetric top",
                }, "a_cm": t.a_cm, "b_cm": t.b_cm, "c_cm": t.c_cm, "kappa": t.kappa(),
                "polarizability_a3": {"a": t.polarizability_a3[0], "b": t.polarizability_a3[1], "c": t.polarizability_a3[2]},
                "delta_alpha_a3": da, "alignment_axis": t.alignment_axis.letter(), "spin_weights": t.spin_weights}),
        },
        "body_axes": match &tr.body_axes {
            None => Value::Null,
            Some(b) => json!({"peak_cos2_a": extremum(tr.max_after(&b.a, after)), "peak_cos2_b": extremum(tr.max_after(&b.b, after)),
                "peak_cos2_c": extremum(tr.max_after(&b.c, after))}),
        },
        // The strongest orientation with each lab axis after the last pulse, either way along the axis.
        "lab_orientation": if tr.lab_cos.is_empty() { Value::Null } else {
            Value::Object(tr.lab_cos.iter().map(|s| {
                let e = match (tr.max_after(&s.values, after), tr.min_after(&s.values, after)) {
                    (Some(h), Some(l)) => Some(if h.value.abs() >= l.value.abs() { h } else { l }),
                    _ => None,
                };
                (format!("strongest_{}", s.name), extremum(e))
            }).collect())
        },
        "lab_axes": if tr.lab_axes.is_empty() { Value::Null } else {
            Value::Object(tr.lab_axes.iter().map(|s| (format!("peak_{}", s.name), extremum(tr.max_after(&s.values, after)))).collect())
        },
        "temperature_k": s.temperature_k,
        "pulses": pulses,
        "after_last_pulse_from_ps": if after.is_finite() { json!(after) } else { Value::Null },
        "peak_cos2": extremum(tr.max_after(&tr.cos2, after)),
        "peak_cos2_2d": extremum(tr.cos2_2d().and_then(|c| tr.max_after(c, after))),
        "min_cos2": extremum(tr.min_after(&tr.cos2, after)),
        "min_cos2_2d": extremum(tr.cos2_2d().and_then(|c| tr.min_after(c, after))),
        "static_field": s.field.static_field,
        "two_colour": s.field.two_colour,
        "terahertz": s.field.terahertz,
        "peak_orientation": match tr.cos() {
            None => Value::Null,
            Some(cos) => match (tr.max_after(cos, after), tr.min_after(cos, after)) {
                (Some(h), Some(l)) => {
                    let e = if h.value.abs() >= l.value.abs() { h } else { l };
                    json!({"cos": e.value, "t_ps": e.t_ps, "sign": if e.value >= 0.0 { "+Z" } else { "-Z" }})
                }
                _ => Value::Null,
            }
        },
        "permanent_cos": r.permanent_cos.map(num),
        "focal_average": match (&s.focal_average, &sim.averaged) {
            (Some(a), Some(av)) => {
                let t = &av.trace;
                json!({"settings": a, "peak_cos2": extremum(t.max_after(&t.cos2, after)), "peak_cos2_2d": extremum(t.cos2_2d().and_then(|c| t.max_after(c, after))),
                    "min_cos2": extremum(t.min_after(&t.cos2, after)), "permanent_cos2": num(av.permanent_cos2)})
            }
            _ => Value::Null,
        },
        "permanent_cos2": num(r.permanent_cos2),
        "permanent_cos2_2d": num(r.permanent_cos2_2d),
        "revival_period_ps": revival_period_ps(s.molecule.revival_b_cm()),
        "goal": match (&s.goal, &sim.goal_score) {
            (Some(g), Some(sc)) => json!({"kind": g.kind_name(), "observable": g.observable.name(), "value": num(sc.value),
                "t_ps": sc.t_ps, "relative_to_last_pulse_center_ps": s.last_pulse_center_ps()}),
            _ => Value::Null,
        },
        "thermal": {"initial_states": sim.initial_states, "discarded_population": sim.discarded_population,
            "partition_function": sim.partition_function, "tolerance": s.solver.thermal_tolerance},
        "basis": {"edge_tolerance": s.solver.edge_tolerance, "max_edge_population": max_edge,
            "max_j": r.blocks.iter().map(|b| b.j_max).max(), "blocks": r.blocks},
        "solver": {"method": s.solver.method.name(), "steps": steps},
        "run_time_s": sim.run_time_s,
        "laser_safety": LASER_SAFETY,
    })
}

/// The columns of a trace as trace.csv holds them, in order: `t_ps`, `cos2`, `cos2_2d` (when computed),
/// the body-axis, orientation, three-axis and lab-axis series the run computed, then `extra`. A column
/// without one value per sample (an observable not computed) is left out.
pub fn trace_columns<'a>(trace: &'a Trace, extra: &[(&'a str, &'a [f64])]) -> Vec<(&'a str, &'a [f64])> {
    let mut cols: Vec<(&str, &[f64])> = vec![("t_ps", trace.times_ps.as_slice()), ("cos2", trace.cos2.as_slice())];
    cols.extend(trace.cos2_2d().filter(|c| !c.is_empty()).map(|c| ("cos2_2d", c)));
    if let Some(b) = &trace.body_axes {
        cols.extend([("cos2_a", b.a.as_slice()), ("cos2_b", &b.b), ("cos2_c", &b.c)]);
    }
    if let Some(o) = &trace.orientation {
        cols.push(("cos", o.cos.as_slice()));
        cols.extend(o.cos3.as_deref().map(|c| ("cos3", c)));
    }
    if let Some(b) = &trace.body_axes {
        cols.push(("three_axis", &b.three_axis));
        if !b.three_axis_oriented.is_empty() {
            cols.push(("three_axis_oriented", &b.three_axis_oriented));
        }
    }
    for s in trace.lab_axes.iter().chain(&trace.lab_cos) {
        cols.push((s.name.as_str(), s.values.as_slice()));
    }
    cols.extend_from_slice(extra);
    cols.retain(|(_, c)| c.len() == trace.times_ps.len());
    cols
}

/// The columns of a simulation's trace.csv: the trace, then the focal averages when computed.
pub fn simulation_columns(sim: &Simulation) -> Vec<(&str, &[f64])> {
    let mut extra: Vec<(&str, &[f64])> = vec![];
    if let Some(av) = &sim.averaged {
        extra.push(("cos2_avg", &av.trace.cos2));
        extra.extend(av.trace.cos2_2d().map(|c| ("cos2_2d_avg", c)));
        extra.extend(av.trace.cos().map(|c| ("cos_avg", c)));
    }
    trace_columns(&sim.result.trace, &extra)
}

/// CSV text of `columns` (the first is time, 6 decimals; the others 10 decimals).
pub fn columns_csv(columns: &[(&str, &[f64])]) -> String {
    let names: Vec<&str> = columns.iter().map(|c| c.0).collect();
    let mut out = names.join(",") + "\n";
    let rows = columns.first().map(|c| c.1.len()).unwrap_or(0);
    for i in 0..rows {
        for (k, (_, col)) in columns.iter().enumerate() {
            if k == 0 {
                out.push_str(&format!("{:.6}", col[i]));
            } else {
                out.push_str(&format!(",{:.10}", col[i]));
            }
        }
        out.push('\n');
    }
    out
}

/// The trace as CSV text with columns `t_ps,cos2,cos2_2d` (and any extra named columns).
pub fn trace_csv(trace: &Trace, extra: &[(&str, &[f64])]) -> String {
    columns_csv(&trace_columns(trace, extra))
}

/// A plot of the alignment trace with the pulses marked and the isotropic values drawn.
pub fn alignment_plot(scenario: &Scenario, trace: &Trace, title: &str) -> svg::LinePlot {
    let mut plot = svg::LinePlot::new(title, "time (ps)", "alignment");
    let f = &scenario.field;
    let mut counts = vec![format!("{} pulse(s)", f.pulses.len())];
    if !f.two_colour.is_empty() {
        counts.push(format!("{} two-colour", f.two_colour.len()));
    }
    if !f.terahertz.is_empty() {
        counts.push(format!("{} terahertz", f.terahertz.len()));
    }
    plot.subtitle = Some(format!("{} at {} K; {}; shaded: pulse FWHM", scenario.molecule.name, scenario.temperature_k, counts.join(", ")));
    // With pulses polarized away from Z the lab axis is named too.
    let with_z = if trace.lab_axes.is_empty() { "" } else { " with Z" };
    let axis = scenario.molecule.as_top().map(|t| format!(" ({} axis{with_z})", t.alignment_axis.letter())).unwrap_or_else(|| with_z.to_string());
    plot.series.push(svg::Series {
        label: format!("⟨cos²θ⟩{axis}"),
        x: trace.times_ps.clone(),
        y: trace.cos2.clone(),
        color: svg::ALIGNMENT.into(),
        dashed: false,
        width: 1.6,
    });
    if let (Some(t), Some(b)) = (scenario.molecule.as_top(), &trace.body_axes) {
        // The other two body axes, dashed (their sum with the alignment axis is 1).
        for (i, (series, color)) in [(&b.a, svg::AXIS_A), (&b.b, svg::NEUTRAL), (&b.c, svg::NEUTRAL_LIGHT)].into_iter().enumerate() {
            if i != t.alignment_axis.index() {
                plot.series.push(svg::Series {
                    label: format!("⟨cos²θ⟩ ({} axis{with_z})", ["a", "b", "c"][i]),
                    x: trace.times_ps.clone(),
                    y: series.clone(),
                    color: color.into(),
                    dashed: true,
                    width: 1.2,
                });
            }
        }
    }
    if let Some(t) = scenario.molecule.as_top() {
        // Pulses polarized away from Z: the second axis with X, the partner of a three-axis goal (for a
        // three-axis orientation goal, the most polarizable axis besides the dipole axis).
        let oriented = scenario.goal.as_ref().is_some_and(|g| g.observable == crate::goal::Observable::ThreeAxisOriented);
        let second = if oriented { t.oriented_second_axis() } else { t.second_axis() };
        if let Some(series) = trace.lab_axis(crate::basis::lab::LabAxis::X, Some(second)) {
            plot.series.push(svg::Series {
                label: format!("⟨cos²⟩ ({} axis with X)", second.letter()),
                x: trace.times_ps.clone(),
                y: series.to_vec(),
                color: svg::TEAL.into(),
                dashed: false,
                width: 1.4,
            });
        }
    }
    if let Some(c) = trace.cos2_2d() {
        plot.series.push(svg::Series {
            label: "⟨cos²θ_2D⟩".into(),
            x: trace.times_ps.clone(),
            y: c.to_vec(),
            color: svg::PROJECTED.into(),
            dashed: false,
            width: 1.6,
        });
    }
    if let Some(cos) = trace.cos() {
        plot.series.push(svg::Series {
            label: format!("⟨cosθ⟩{with_z}"),
            x: trace.times_ps.clone(),
            y: cos.to_vec(),
            color: svg::ORIENTATION.into(),
            dashed: false,
            width: 1.6,
        });
        // A field tilted towards X orients along X too (along Y nothing, by the reflection through XZ).
        if let Some(x) = trace.lab_cos.iter().find(|s| s.lab == crate::basis::lab::LabAxis::X) {
            plot.series.push(svg::Series {
                label: "⟨cosθ⟩ with X".into(),
                x: trace.times_ps.clone(),
                y: x.values.clone(),
                color: svg::ORIENTATION.into(),
                dashed: true,
                width: 1.4,
            });
        }
        plot.hlines.push(svg::HLine { y: 0.0, label: "no orientation".into(), color: svg::ORIENTATION.into() });
        plot.y_label = "alignment and orientation".into();
    }
    if let Some(sf) = &scenario.field.static_field {
        let angle = if sf.angle_deg != 0.0 { format!(" at {:.1}° from Z", sf.angle_deg) } else { String::new() };
        // Four significant figures: a searched field may sit a hair below its bound (29.99999999 kV/cm).
        plot.subtitle = Some(format!("{}; static field {} kV/cm{angle}", plot.subtitle.clone().unwrap_or_default(), format_significant(sf.strength_kv_cm, 4)));
    }
    for (i, tc) in scenario.field.two_colour.iter().enumerate() {
        let h = 0.5 * tc.fwhm_fs / 1000.0;
        plot.markers.push(svg::Marker { x0: tc.center_ps - h, x1: tc.center_ps + h, label: format!("ω+2ω {}", i + 1), color: svg::VIOLET.into() });
    }
    for (i, th) in scenario.field.terahertz.iter().enumerate() {
        let h = 0.5 * th.duration_fs / 1000.0;
        plot.markers.push(svg::Marker { x0: th.center_ps - h, x1: th.center_ps + h, label: format!("THz {}", i + 1), color: svg::TEAL.into() });
    }
    for (i, p) in scenario.field.pulses.iter().enumerate() {
        let h = 0.5 * p.fwhm_ps();
        // A truncated pulse ends at its switch-off.
        let x1 = if p.shape == crate::field::PulseShape::Truncated { (p.center_ps + h).min(p.end_ps()) } else { p.center_ps + h };
        plot.markers.push(svg::Marker { x0: (p.center_ps - h).min(x1), x1, label: format!("pulse {}", i + 1), color: svg::PULSE.into() });
    }
    plot.hlines.push(svg::HLine { y: 1.0 / 3.0, label: "isotropic 1/3".into(), color: svg::ALIGNMENT.into() });
    if trace.cos2_2d.is_some() {
        plot.hlines.push(svg::HLine { y: 0.5, label: "isotropic 2D 1/2".into(), color: svg::PROJECTED.into() });
    }
    plot
}

/// Create `dir` (and parents) and write `name` inside it, flushed to disk. Commands write into the staging
/// folder of an [`output::OutputDir`], so that the folder the user names appears whole or not at all.
pub fn write_file(dir: &Path, name: &str, contents: &str) -> Result<()> {
    std::fs::create_dir_all(dir).map_err(|e| Error::Io(format!("cannot create output folder {}: {e}", dir.display())))?;
    output::write_synced(&dir.join(name), contents)
}

/// Write `summary.json`, `trace.csv` and `alignment.svg` of a simulation into `dir`.
pub fn write_simulation(sim: &Simulation, dir: &Path) -> Result<Value> {
    let summary = simulation_summary(sim);
    write_file(dir, "summary.json", &(serde_json::to_string_pretty(&summary).expect("summary serializes") + "\n"))?;
    write_file(dir, "trace.csv", &columns_csv(&simulation_columns(sim)))?;
    // Without a description: what the plot shows (a static field that stays on is not field-free).
    let default_title = if sim.result.trace.orientation.is_some() { "Alignment and orientation" } else { "Alignment" };
    let title = sim.scenario.description.clone().unwrap_or_else(|| default_title.to_string());
    let mut plot = alignment_plot(&sim.scenario, &sim.result.trace, &title);
    if let Some(av) = &sim.averaged {
        plot.series.push(svg::Series {
            label: "⟨cos²θ⟩ focal average".into(),
            x: av.trace.times_ps.clone(),
            y: av.trace.cos2.clone(),
            color: svg::ALIGNMENT.into(),
            dashed: true,
            width: 1.4,
        });
        plot.series.push(svg::Series {
            label: "⟨cos²θ_2D⟩ focal average".into(),
            x: av.trace.times_ps.clone(),
            y: av.trace.cos2_2d().unwrap_or_default().to_vec(),
            color: svg::PROJECTED.into(),
            dashed: true,
            width: 1.4,
        });
    }
    write_file(dir, "alignment.svg", &plot.to_svg())?;
    Ok(summary)
}

/// `x` rounded to `digits` significant figures, written without trailing zeros (30, 12.5, 0.0125).
pub fn format_significant(x: f64, digits: usize) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let decimals = (digits as i32 - 1 - x.abs().log10().floor() as i32).max(0) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
}

#[cfg(test)]
mod format_tests {
    use super::format_significant;

    #[test]
    fn numbers_keep_four_significant_figures_without_trailing_zeros() {
        assert_eq!(format_significant(29.99999999330194, 4), "30");
        assert_eq!(format_significant(12.5, 4), "12.5");
        assert_eq!(format_significant(0.012345, 4), "0.01235");
        assert_eq!(format_significant(1234.6, 4), "1235");
        assert_eq!(format_significant(50.0, 4), "50");
    }
}
