//! Reports of a design search: the replayable design, its summary, traces, history and plots.

use super::{LASER_SAFETY, num, svg, trace_columns, write_file};
use crate::design::score::Replay;
use crate::design::search::{COUNT_GAIN_THRESHOLD, Candidate, Confidence, DesignResult, STARTS_THAT_MUST_AGREE};
use crate::design::{Objective, fluence_jcm2};
use crate::error::Result;
use crate::field::FieldModel;
use serde_json::{Value, json};
use std::path::Path;

fn pulses_json(obj: &Objective, field: &FieldModel) -> Vec<Value> {
    let da = obj.molecule().delta_alpha_a3();
    if !field.two_colour.is_empty() {
        return field
            .two_colour
            .iter()
            .enumerate()
            .map(|(i, t)| {
                let total = t.fundamental_intensity_wcm2 + t.second_harmonic_intensity_wcm2;
                json!({
                    "pulse": i + 1, "kind": "two_colour", "center_ps": t.center_ps,
                    "delay_after_previous_ps": if i == 0 { Value::Null } else { json!(t.center_ps - field.two_colour[i - 1].center_ps) },
                    "fundamental_intensity_wcm2": t.fundamental_intensity_wcm2, "second_harmonic_intensity_wcm2": t.second_harmonic_intensity_wcm2,
                    "peak_intensity_wcm2": total, "fraction_of_ceiling": total / obj.space.max_peak_intensity_wcm2,
                    "phase_rad": t.phase_rad, "fwhm_fs": t.fwhm_fs, "shape": t.shape,
                    "kick_strength": t.envelope_pulse().kick_strength(da) * total,
                })
            })
            .collect();
    }
    field
        .pulses
        .iter()
        .enumerate()
        .map(|(i, p)| {
            json!({
                "pulse": i + 1,
                "center_ps": p.center_ps,
                "delay_after_previous_ps": if i == 0 { Value::Null } else { json!(p.center_ps - field.pulses[i - 1].center_ps) },
                "peak_intensity_wcm2": p.peak_intensity_wcm2,
                "fraction_of_ceiling": p.peak_intensity_wcm2 / obj.space.max_peak_intensity_wcm2,
                "fwhm_fs": p.fwhm_fs,
                "shape": p.shape,
                "kick_strength": p.kick_strength(da),
                "polarization": p.polarization,
                "cut_fs": p.cut_fs,
                "fluence_jcm2": fluence_jcm2(p),
                "ionized_fraction_adk": obj.molecule().ionization_energy_ev.map(|ip| crate::optics::ionization::ionized_fraction(p, ip)),
            })
        })
        .collect()
}

/// The kick-model score (null when the pulses were too long for the kick model).
fn kick_value(c: &Candidate) -> Value {
    c.kick.map(|k| num(k.value)).unwrap_or(Value::Null)
}

fn candidate_json(obj: &Objective, c: &Candidate) -> Value {
    json!({
        "score": num(c.full.value), "time_ps": c.full.t_ps,
        "kick_model_score": kick_value(c), "kick_model_time_ps": c.kick.map(|k| k.t_ps),
        "pulses": pulses_json(obj, &c.field),
    })
}

/// How sure the search is of one pulse count's design, as JSON.
fn confidence_json(c: &Confidence) -> Value {
    json!({
        "starts": c.starts.len(),
        "starts_agreeing": c.agreeing,
        "agreement": c.agreement,
        "spread": num(c.spread),
        "stopped_by": c.stopped_by,
        "converged": c.agreeing >= STARTS_THAT_MUST_AGREE,
        "per_start": c.starts.iter().map(|s| json!({"swarm": num(s.swarm), "polished": num(s.polished), "full_solver": num(s.full), "evaluations": s.evaluations})).collect::<Vec<_>>(),
    })
}

/// The summary of a design search as JSON.
pub fn design_summary(obj: &Objective, r: &DesignResult) -> Value {
    let g = &obj.goal;
    let best = &r.best;
    json!({
        "kicktrain_version": env!("CARGO_PKG_VERSION"),
        "description": obj.description,
        "molecule": obj.molecule().name,
        "temperature_k": obj.base.temperature_k,
        "goal": serde_json::to_value(crate::input::scenario_file::GoalFile::from_goal(g)).expect("a goal serializes"),
        "observable": g.observable.name(),
        "score": num(best.full.value),
        "score_time_ps": best.full.t_ps,
        "kick_model_score": kick_value(best),
        "kick_model_score_time_ps": best.kick.map(|k| k.t_ps),
        "full_minus_kick_model": best.kick.map(|k| num(best.full.value - k.value)).unwrap_or(Value::Null),
        "screening": if obj.kick_screening() { "kick model, then full solver" } else { "full solver only (pulses too long for the kick model)" },
        "pulses": pulses_json(obj, &best.field),
        "static_field": best.field.static_field,
        "terahertz": best.field.terahertz,
        "max_peak_intensity_wcm2": obj.space.max_peak_intensity_wcm2,
        "max_total_fluence_jcm2": obj.space.max_total_fluence_jcm2,
        "total_fluence_jcm2": best.field.pulses.iter().map(fluence_jcm2).sum::<f64>(),
        "min_separation_ps": obj.space.min_separation_ps,
        "single_pulse_baseline": candidate_json(obj, &r.baseline),
        "gain_over_single_pulse": num(g.sense() * (best.full.value - r.baseline.full.value)),
        "per_pulse_count": r.per_count.iter().zip(&r.confidence).map(|(c, conf)| json!({"pulses": c.field.pulses.len().max(c.field.two_colour.len()), "score": num(c.full.value),
            "kick_model_score": kick_value(c), "search": confidence_json(conf)})).collect::<Vec<_>>(),
        "search": {
            "effort": obj.search.effort.name(),
            "time_limit_s": obj.search.time_limit_s,
            "confidence": r.best_confidence().map(confidence_json),
            "seeds": "a quarter of every swarm starts from physics seeds: trains with each pulse at the alignment peak left by the earlier ones, trains spaced by multiples of a quarter revival period, and (with max_count) the best design with one pulse fewer extended by one pulse",
            "stopping_rule": format!("starts run until {STARTS_THAT_MUST_AGREE} agree within {} in the split-kick model (or the start limit or time limit is reached)", obj.search.agreement),
        },
        "warnings": r.confidence.iter().filter_map(|c| c.warning.clone()).collect::<Vec<_>>(),
        "pulse_count_rule": if obj.variable_count { json!(format!("fewest pulses within {COUNT_GAIN_THRESHOLD} of the best score")) } else { Value::Null },
        "evaluations": {"kick_model": r.kick_evaluations, "full_solver": r.full_evaluations},
        "run_time_s": r.run_time_s,
        "seed": obj.search.seed,
        "robust": obj.robust.map(|(n, k)| json!({"jitter_fs": n.jitter_fs, "energy_noise_percent": n.energy_percent, "phase_noise_rad": n.phase_rad, "samples": k,
            "note": "score is the mean over these error samples (full solver); replay_score is the nominal score that design.json reproduces; the kick-model score is nominal"})),
        "interrupted": r.interrupted,
        "laser_safety": LASER_SAFETY,
    })
}

/// History as CSV: evaluation, stage, best value so far in that stage's model.
pub fn history_csv(r: &DesignResult) -> String {
    let mut out = String::from("evaluation,stage,best\n");
    for h in &r.history {
        out.push_str(&format!("{},\"{}\",{:.10}\n", h.evaluation, h.stage.replace('"', "'"), h.best));
    }
    out
}

/// Plot of the best value versus evaluations: one line per independent start (its kick-model swarm and
/// line search, then its split-kick polish, which sits closer to the full solver), and one dashed line
/// per full-solver stage.
pub fn convergence_plot(obj: &Objective, r: &DesignResult) -> svg::LinePlot {
    let mut plot = svg::LinePlot::new("Search convergence", "objective evaluations", format!("best {} ({})", obj.goal.kind_name(), obj.goal.observable.name()));
    // "3 pulses · start 2 · kick swarm" belongs to the line "3 pulses · start 2".
    let line_of = |stage: &str| -> String {
        let parts: Vec<&str> = stage.split(" · ").collect();
        if parts.len() >= 3 && parts[1].starts_with("start") { format!("{} · {}", parts[0], parts[1]) } else { stage.to_string() }
    };
    let mut lines: Vec<String> = vec![];
    for h in r.history.iter().filter(|h| h.stage != "done" && !h.stage.starts_with("baseline")) {
        let l = line_of(&h.stage);
        if !lines.contains(&l) {
            lines.push(l);
        }
    }
    let mut start_index = 0;
    for l in &lines {
        let pts: Vec<_> = r.history.iter().filter(|h| &line_of(&h.stage) == l).collect();
        let mut x: Vec<f64> = pts.iter().map(|h| h.evaluation as f64).collect();
        let mut y: Vec<f64> = pts.iter().map(|h| h.best).collect();
        if x.len() == 1 {
            x.push(x[0]);
            y.push(y[0]);
        }
        let full = l.contains("full");
        let color = if full {
            svg::INK.to_string()
        } else {
            start_index += 1;
            svg::PALETTE[(start_index - 1) % svg::PALETTE.len()].to_string()
        };
        plot.series.push(svg::Series { label: l.clone(), x, y, color, dashed: full, width: if full { 2.2 } else { 1.4 } });
    }
    plot.subtitle = Some(format!(
        "every start shown; {} kick-model (incl. split-kick) and {} full-solver evaluations, seed {}",
        r.kick_evaluations, r.full_evaluations, obj.search.seed
    ));
    plot
}

/// The contents of design.json: the replayed scenario (a valid scenario file) with the laser-safety caution.
pub fn design_file(replay: &Replay) -> Value {
    let mut v = replay.scenario.to_value();
    if let Value::Object(map) = &mut v {
        map.insert("laser_safety".into(), json!(LASER_SAFETY));
    }
    v
}

/// The columns of a design's trace.csv: the design's replayed trace, then the single-pulse baseline's.
pub fn design_columns(replay: &Replay) -> Vec<(&str, &[f64])> {
    let bt = &replay.baseline.result.trace;
    let extra: Vec<(&str, &[f64])> =
        [("baseline_cos2", Some(bt.cos2.as_slice())), ("baseline_cos2_2d", bt.cos2_2d()), ("baseline_three_axis", bt.three_axis())]
            .into_iter()
            .filter_map(|(n, s)| s.filter(|s| !s.is_empty()).map(|s| (n, s)))
            .collect();
    trace_columns(&replay.design.result.trace, &extra)
}

/// The summary.json of a design with its replay: [`design_summary`] and the replay's score.
pub fn replayed_summary(obj: &Objective, r: &DesignResult, replay: &Replay) -> Value {
    let mut summary = design_summary(obj, r);
    summary["replay_score"] = match replay.design.goal_score {
        Some(s) => num(s.value),
        None => Value::Null,
    };
    summary
}

/// Write design.json, summary.json, trace.csv, design.svg, history.csv and convergence.svg of the design
/// `r` into `dir`, with the traces of its replay (see `design::score::replay`). Returns the summary.
pub fn write_design(obj: &Objective, r: &DesignResult, replay: &Replay, dir: &Path) -> Result<Value> {
    let (scenario, sim, base) = (&replay.scenario, &replay.design, &replay.baseline);
    let summary = replayed_summary(obj, r, replay);
    write_file(dir, "design.json", &(serde_json::to_string_pretty(&design_file(replay)).expect("json") + "\n"))?;
    write_file(dir, "summary.json", &(serde_json::to_string_pretty(&summary).expect("json") + "\n"))?;
    write_file(dir, "trace.csv", &super::columns_csv(&design_columns(replay)))?;
    let mut plot = super::alignment_plot(scenario, &sim.result.trace, "Optimized pulse train");
    plot.y_label = "alignment".into();
    let obs = obj.goal.observable;
    let base_series = crate::design::score::series(obs, &base.result.trace).unwrap_or_default().to_vec();
    let label = match obs {
        crate::goal::Observable::Cos2 => "best single pulse ⟨cos²θ⟩",
        crate::goal::Observable::Cos2TwoD => "best single pulse ⟨cos²θ_2D⟩",
        crate::goal::Observable::Cos => "best single pulse ⟨cosθ⟩",
        crate::goal::Observable::CosX => "best single pulse ⟨cosθ_X⟩",
        crate::goal::Observable::ThreeAxis => "single pulse, three-axis",
        crate::goal::Observable::ThreeAxisOriented => "single pulse, three-axis orientation",
    };
    if matches!(obs, crate::goal::Observable::ThreeAxis | crate::goal::Observable::ThreeAxisOriented) {
        plot.series.push(svg::Series {
            label: if obs == crate::goal::Observable::ThreeAxis { "three-axis goal" } else { "three-axis orientation goal" }.into(),
            x: sim.result.trace.times_ps.clone(),
            y: crate::design::score::series(obs, &sim.result.trace).unwrap_or_default().to_vec(),
            color: svg::VIOLET.into(),
            dashed: false,
            width: 1.8,
        });
    }
    plot.series.push(svg::Series {
        label: label.into(),
        x: base.result.trace.times_ps.clone(),
        y: base_series,
        color: svg::NEUTRAL.into(),
        dashed: true,
        width: 1.2,
    });
    if let Some(t) = r.best.full.t_ps {
        plot.markers.push(svg::Marker { x0: t, x1: t, label: format!("optimum {:.4}", r.best.full.value), color: svg::ORIENTATION.into() });
    }
    plot.subtitle = Some(format!(
        "{} at {} K; goal: {} {}; score {:.4} vs single pulse {:.4}",
        obj.molecule().name,
        obj.base.temperature_k,
        obj.goal.kind_name(),
        obs.name(),
        r.best.full.value,
        r.baseline.full.value
    ));
    write_file(dir, "design.svg", &plot.to_svg())?;
    write_file(dir, "history.csv", &history_csv(r))?;
    write_file(dir, "convergence.svg", &convergence_plot(obj, r).to_svg())?;
    Ok(summary)
}
