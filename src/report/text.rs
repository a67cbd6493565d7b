//! What the command line prints: the tables and summaries of `molecules`, `simulate`, `design`,
//! `pendular` and `focus` as strings (each line ends in a newline), and their JSON forms where the
//! command prints one. The command line only prints these; the numbers come from the library.

use super::LASER_SAFETY;
use crate::molecule::{Sourced, library, top_library};
use crate::optics::report::FocusReport;
use crate::pendular::PendularResult;
use serde_json::{Value, json};
use std::fmt::{self, Write};

/// The lines `f` writes, collected into one string.
fn lines(f: impl FnOnce(&mut String) -> fmt::Result) -> String {
    let mut out = String::new();
    f(&mut out).expect("formatting into a String");
    out
}

/// `v`, or +0 when it would print as −0 with `decimals` decimals (rounding noise around zero).
pub fn no_negative_zero(v: f64, decimals: i32) -> f64 {
    if v.abs() < 0.5 * 10f64.powi(-decimals) { 0.0 } else { v }
}

/// The built-in molecules (linear rotors and tops) with every constant and its source, as `molecules --json` prints it.
pub fn molecules_json() -> Value {
    let list: Vec<_> = library()
        .iter()
        .map(|e| {
            json!({
                "name": e.name, "aliases": e.aliases, "description": e.description,
                "b_cm": {"value": e.b_cm.value, "source": e.b_cm.source},
                "d_cm": {"value": e.d_cm.value, "source": e.d_cm.source},
                "alpha_parallel_a3": {"value": e.alpha_parallel_a3.value, "source": e.alpha_parallel_a3.source},
                "alpha_perpendicular_a3": {"value": e.alpha_perpendicular_a3.value, "source": e.alpha_perpendicular_a3.source},
                "spin_weights": {"value": e.spin_weights, "source": e.spin_weights_source},
                "dipole_debye": e.dipole_debye.map(|d| json!({"value": d.value, "source": d.source})),
                "beta_parallel_au": e.beta_parallel_au.map(|d| json!({"value": d.value, "source": d.source})),
                "beta_perpendicular_au": e.beta_perpendicular_au.map(|d| json!({"value": d.value, "source": d.source})),
                "ionization_energy_ev": e.ionization_energy_ev.map(|d| json!({"value": d.value, "source": d.source})),
            })
        })
        .collect();
    let tops: Vec<_> = top_library()
        .iter()
        .map(|e| {
            let sv = |x: &Sourced| json!({"value": x.value, "source": x.source});
            json!({
                "name": e.name, "aliases": e.aliases, "description": e.description,
                "a_cm": sv(&e.constants_cm[0]), "b_cm": sv(&e.constants_cm[1]), "c_cm": sv(&e.constants_cm[2]),
                "d_j_cm": sv(&e.distortion_cm[0]), "d_jk_cm": sv(&e.distortion_cm[1]),
                "polarizability_a3": {"a": sv(&e.polarizability_a3[0]), "b": sv(&e.polarizability_a3[1]), "c": sv(&e.polarizability_a3[2])},
                "dipole": e.dipole.map(|d| json!({"value_debye": d.0.value, "axis": d.1.letter(), "source": d.0.source})),
                "spin_weights": {"value": e.spin_weights, "source": e.spin_weights_source},
                "ionization_energy_ev": e.ionization_energy_ev.map(|d| sv(&d)),
                "beta_au": e.beta_au.as_ref().map(|b| json!({"a": sv(&b[0]), "b": sv(&b[1]), "c": sv(&b[2])})),
            })
        })
        .collect();
    json!({"linear": list, "tops": tops})
}

/// The table of built-in molecules that `kicktrain molecules` prints (linear rotors, then tops).
pub fn molecules_table() -> String {
    lines(|o| {
        writeln!(
            o,
            "{:<6} {:>11} {:>10} {:>8} {:>8} {:>7} {:>9} {:>7} {:>15}  description",
            "name", "B (cm⁻¹)", "D (cm⁻¹)", "α∥ (Å³)", "α⊥ (Å³)", "Δα", "even:odd", "μ (D)", "β∥, β⊥ (a.u.)"
        )?;
        for e in library() {
            let dipole = e.dipole_debye.map(|d| format!("{:.4}", d.value)).unwrap_or_else(|| "—".into());
            let beta = match (e.beta_parallel_au, e.beta_perpendicular_au) {
                (Some(a), Some(b)) => format!("{:.2}, {:.2}", a.value, b.value),
                _ => "—".into(),
            };
            writeln!(
                o,
                "{:<6} {:>11.6} {:>10.3e} {:>8.3} {:>8.3} {:>7.3} {:>4}:{:<4} {:>7} {:>15}  {}",
                e.name,
                e.b_cm.value,
                e.d_cm.value,
                e.alpha_parallel_a3.value,
                e.alpha_perpendicular_a3.value,
                e.alpha_parallel_a3.value - e.alpha_perpendicular_a3.value,
                e.spin_weights[0],
                e.spin_weights[1],
                dipole,
                beta,
                e.description
            )?;
        }
        writeln!(o, "\n{:<6} {:>9} {:>9} {:>9} {:>6} {:>21}  description", "top", "A (cm⁻¹)", "B (cm⁻¹)", "C (cm⁻¹)", "κ", "α_a, α_b, α_c (Å³)")?;
        for e in top_library() {
            let m = e.molecule();
            let Some(t) = m.as_top() else { continue };
            let p = t.polarizability_a3;
            writeln!(
                o,
                "{:<6} {:>9.5} {:>9.5} {:>9.5} {:>6.2} {:>6.2}, {:>5.2}, {:>5.2}  {}",
                e.name,
                t.a_cm,
                t.b_cm,
                t.c_cm,
                t.kappa(),
                p[0],
                p[1],
                p[2],
                e.description
            )?;
        }
        writeln!(o, "\nSources of every constant: kicktrain molecules --json")
    })
}

/// ", switched off … fs from the peak" for a truncated pulse cut away from its peak (JSON `cut_fs`).
fn cut_text(p: &Value) -> String {
    p["cut_fs"].as_f64().map(|c| format!(", switched off {c:+.1} fs from the peak")).unwrap_or_default()
}

/// ", polarized at A° from Z, ellipticity E" for pulses not polarized along Z (empty otherwise).
fn polarization_text(v: &Value) -> String {
    let (a, e) = (v["angle_deg"].as_f64().unwrap_or(0.0), v["ellipticity"].as_f64().unwrap_or(0.0));
    if a == 0.0 && e == 0.0 { String::new() } else { format!(", polarized at {a:.1}° from Z towards X, ellipticity {e:.3}") }
}

/// An extremum `{"value", "t_ps"}` as "value at t ps", or a dash when the window missed it.
fn fmt_ext(v: &Value) -> String {
    match (v.get("value").and_then(|x| x.as_f64()), v.get("t_ps").and_then(|x| x.as_f64())) {
        (Some(a), Some(t)) => format!("{a:.4} at {t:.3} ps"),
        _ => "— (window ends before the last pulse)".into(),
    }
}

/// What `kicktrain simulate` prints for a simulation summary (see [`super::simulation_summary`]).
pub fn simulation_text(s: &Value) -> String {
    lines(|o| {
        writeln!(o, "{} at {} K", s["molecule"]["name"].as_str().unwrap_or("?"), s["temperature_k"])?;
        if let Some(ps) = s["pulses"].as_array() {
            for (i, p) in ps.iter().enumerate() {
                let energy = match (p["energy_mj"].as_f64(), p["waist_um"].as_f64()) {
                    (Some(e), Some(w)) => format!(" ({e} mJ focused to w0 = {w:.1} µm)"),
                    _ => String::new(),
                };
                let ion = p["ionized_fraction_adk"].as_f64().map(|x| format!(", ionized ≈ {x:.1e} (ADK estimate)")).unwrap_or_default();
                writeln!(
                    o,
                    "  pulse {}: centre {:.4} ps, FWHM {} fs, {:.3e} W/cm²{energy}, kick strength {:.3} ({}){ion}{}",
                    i + 1,
                    p["center_ps"].as_f64().unwrap_or(0.0),
                    p["fwhm_fs"],
                    p["peak_intensity_wcm2"].as_f64().unwrap_or(0.0),
                    p["kick_strength"].as_f64().unwrap_or(0.0),
                    p["method"].as_str().unwrap_or(""),
                    polarization_text(&p["polarization"]) + &cut_text(p)
                )?;
            }
        }
        for (i, t) in s["two_colour"].as_array().into_iter().flatten().enumerate() {
            writeln!(
                o,
                "  two-colour pulse {}: centre {:.4} ps, FWHM {} fs, ω {:.3e} W/cm² + 2ω {:.3e} W/cm², phase {:.4} rad",
                i + 1,
                t["center_ps"].as_f64().unwrap_or(0.0),
                t["fwhm_fs"],
                t["fundamental_intensity_wcm2"].as_f64().unwrap_or(0.0),
                t["second_harmonic_intensity_wcm2"].as_f64().unwrap_or(0.0),
                t["phase_rad"].as_f64().unwrap_or(0.0)
            )?;
        }
        for (i, t) in s["terahertz"].as_array().into_iter().flatten().enumerate() {
            writeln!(
                o,
                "  terahertz pulse {}: centre {:.4} ps, {} fs, peak field {:.1} kV/cm, {}",
                i + 1,
                t["center_ps"].as_f64().unwrap_or(0.0),
                t["duration_fs"],
                t["peak_field_kv_cm"].as_f64().unwrap_or(0.0),
                t["waveform"].as_str().unwrap_or("?").replace('_', "-")
            )?;
        }
        if let Some(e) = s["static_field"]["strength_kv_cm"].as_f64() {
            let on = s["static_field"]["on_ps"].as_f64().map(|t| format!(" from {t} ps")).unwrap_or_else(|| " (entered adiabatically)".into());
            let off = s["static_field"]["off_ps"].as_f64().map(|t| format!(" until {t} ps")).unwrap_or_default();
            let angle = s["static_field"]["angle_deg"].as_f64().map(|a| format!(" at {a:.1}° from Z towards X")).unwrap_or_default();
            writeln!(o, "  static field {e:.3} kV/cm{angle}{on}{off}")?;
        }
        writeln!(o, "  peak ⟨cos²θ⟩ after the last pulse    {}", fmt_ext(&s["peak_cos2"]))?;
        // A run that does not compute ⟨cos²θ_2D⟩ (a tilted static field) says nothing about it.
        if !s["peak_cos2_2d"].is_null() || s["peak_cos2"].is_null() {
            writeln!(o, "  peak ⟨cos²θ_2D⟩ after the last pulse {}", fmt_ext(&s["peak_cos2_2d"]))?;
        }
        if let Some(obj) = s["lab_axes"].as_object() {
            for (name, v) in obj {
                writeln!(o, "  {:<37}{}", format!("{} after the last pulse", name.replace("peak_cos2_", "peak ⟨cos²⟩ ")), fmt_ext(v))?;
            }
        }
        if let Some(obj) = s["lab_orientation"].as_object() {
            for (name, v) in obj.iter().filter(|(n, _)| !n.contains("cos_Y")) {
                writeln!(o, "  {:<37}{}", format!("{} after last pulse", name.replace("strongest_cos_", "strongest ⟨cosθ⟩ ")), fmt_ext(v))?;
            }
        }
        writeln!(o, "  deepest anti-alignment ⟨cos²θ⟩      {}", fmt_ext(&s["min_cos2"]))?;
        match s["permanent_cos2"].as_f64() {
            Some(v) => writeln!(o, "  permanent alignment ⟨cos²θ⟩         {v:.4}")?,
            None => writeln!(o, "  permanent alignment ⟨cos²θ⟩         not computed (a tilted static field stays on)")?,
        }
        if let Some(p) = s.get("peak_orientation").filter(|p| !p.is_null()) {
            writeln!(
                o,
                "  peak orientation ⟨cosθ⟩ after the last pulse {:.4} at {:.3} ps (towards {}); permanent {}",
                p["cos"].as_f64().unwrap_or(0.0),
                p["t_ps"].as_f64().unwrap_or(0.0),
                p["sign"].as_str().unwrap_or("?"),
                match s["permanent_cos"].as_f64() {
                    Some(v) => format!("{:.4}", no_negative_zero(v, 4)),
                    None => "not computed".to_string(),
                }
            )?;
        }
        if let Some(fa) = s.get("focal_average").filter(|v| !v.is_null()) {
            let along = match fa["settings"]["sample_length_um"].as_f64() {
                Some(l) => format!(" (also along the beam over {l} µm)"),
                None => String::new(),
            };
            writeln!(o, "  focal-volume average{along}: peak ⟨cos²θ⟩ {}, peak ⟨cos²θ_2D⟩ {}", fmt_ext(&fa["peak_cos2"]), fmt_ext(&fa["peak_cos2_2d"]))?;
        }
        if s["molecule"]["rotor"] == "asymmetric top" {
            writeln!(
                o,
                "  revival period (estimate, (B+C)/2)   {:.4} ps (an asymmetric top has no exact revivals)",
                s["revival_period_ps"].as_f64().unwrap_or(0.0)
            )?;
        } else {
            writeln!(o, "  revival period                      {:.4} ps", s["revival_period_ps"].as_f64().unwrap_or(0.0))?;
        }
        writeln!(
            o,
            "  {} initial states (discarded population {:.1e}); basis up to J = {} (edge population {:.1e}); {:.3} s",
            s["thermal"]["initial_states"],
            s["thermal"]["discarded_population"].as_f64().unwrap_or(0.0),
            s["basis"]["max_j"],
            s["basis"]["max_edge_population"].as_f64().unwrap_or(0.0),
            s["run_time_s"].as_f64().unwrap_or(0.0)
        )?;
        let lasers = |key: &str| !s[key].as_array().map(|a| a.is_empty()).unwrap_or(true);
        if lasers("pulses") || lasers("two_colour") || lasers("terahertz") {
            writeln!(o, "  {LASER_SAFETY}")?;
        }
        Ok(())
    })
}

/// What `kicktrain design` prints for a design summary (see [`super::design::design_summary`]).
pub fn design_text(s: &Value) -> String {
    let f = |v: &Value| v.as_f64().map(|x| format!("{x:.5}")).unwrap_or_else(|| "—".into());
    lines(|o| {
        writeln!(
            o,
            "{} at {} K — goal: {} of {} (window {} ps after the last pulse centre)",
            s["molecule"].as_str().unwrap_or("?"),
            s["temperature_k"],
            s["goal"]["kind"].as_str().unwrap_or("?"),
            s["observable"].as_str().unwrap_or("?"),
            s["goal"].get("window_ps").map(|w| w.to_string()).unwrap_or_else(|| s["goal"]["at_ps"].to_string())
        )?;
        if s["interrupted"].as_bool() == Some(true) {
            writeln!(o, "  (search interrupted: best design found so far)")?;
        }
        if let Some(c) = s["search"]["confidence"].as_object() {
            writeln!(
                o,
                "  search: {} of {} independent starts reached this score (within {}; spread {}), effort {}, stopped by {}",
                c["starts_agreeing"],
                c["starts"],
                c["agreement"],
                f(&c["spread"]),
                s["search"]["effort"].as_str().unwrap_or("?"),
                c["stopped_by"].as_str().unwrap_or("?")
            )?;
        }
        for w in s["warnings"].as_array().into_iter().flatten() {
            writeln!(o, "  warning: {}", w.as_str().unwrap_or(""))?;
        }
        if s["kick_model_score"].is_null() {
            writeln!(
                o,
                "  score {} at {} ps (full solver; pulses too long for the kick model, searched with the full solver throughout)",
                f(&s["score"]),
                f(&s["score_time_ps"])
            )?;
        } else {
            writeln!(
                o,
                "  score {} at {} ps (full solver); kick model {} (difference {})",
                f(&s["score"]),
                f(&s["score_time_ps"]),
                f(&s["kick_model_score"]),
                f(&s["full_minus_kick_model"])
            )?;
        }
        if let Some(ps) = s["pulses"].as_array() {
            for p in ps {
                writeln!(
                    o,
                    "  pulse {}: t = {:.4} ps, {:.4e} W/cm² ({:.0} % of ceiling), FWHM {:.1} fs, kick strength {:.3}{}",
                    p["pulse"],
                    p["center_ps"].as_f64().unwrap_or(0.0),
                    p["peak_intensity_wcm2"].as_f64().unwrap_or(0.0),
                    100.0 * p["fraction_of_ceiling"].as_f64().unwrap_or(0.0),
                    p["fwhm_fs"].as_f64().unwrap_or(0.0),
                    p["kick_strength"].as_f64().unwrap_or(0.0),
                    polarization_text(&p["polarization"]) + &cut_text(p)
                )?;
            }
        }
        if let Some(e) = s["static_field"]["strength_kv_cm"].as_f64() {
            let angle = s["static_field"]["angle_deg"].as_f64().map(|a| format!(" at {a:.1}° from Z towards X")).unwrap_or_default();
            writeln!(o, "  static field {e:.3} kV/cm{angle} (on throughout)")?;
        }
        if let Some(ps) = s["pulses"].as_array()
            && let Some(p) = ps.first().filter(|p| p["kind"] == "two_colour")
        {
            writeln!(
                o,
                "  two-colour: second-harmonic share {:.3}, phase {:.4} rad",
                p["second_harmonic_intensity_wcm2"].as_f64().unwrap_or(0.0) / p["peak_intensity_wcm2"].as_f64().unwrap_or(1.0),
                p["phase_rad"].as_f64().unwrap_or(0.0)
            )?;
        }
        if let Some(t) = s["terahertz"].as_array().and_then(|a| a.first()) {
            writeln!(
                o,
                "  terahertz pulse at {:.4} ps, peak field {:.1} kV/cm",
                t["center_ps"].as_f64().unwrap_or(0.0),
                t["peak_field_kv_cm"].as_f64().unwrap_or(0.0)
            )?;
        }
        writeln!(o, "  best single pulse under the same ceiling: {} → gain {}", f(&s["single_pulse_baseline"]["score"]), f(&s["gain_over_single_pulse"]))?;
        if let Some(pc) = s["per_pulse_count"].as_array()
            && pc.len() > 1
        {
            let parts: Vec<String> = pc.iter().map(|c| format!("{}: {}", c["pulses"], f(&c["score"]))).collect();
            writeln!(o, "  score by pulse count: {}", parts.join(", "))?;
        }
        writeln!(
            o,
            "  {} kick-model + {} full-solver evaluations in {:.1} s (seed {})",
            s["evaluations"]["kick_model"],
            s["evaluations"]["full_solver"],
            s["run_time_s"].as_f64().unwrap_or(0.0),
            s["seed"]
        )?;
        writeln!(o, "  {LASER_SAFETY}")
    })
}

/// The dressed states of `molecule` in `intensity_wcm2` and `static_kv_cm` as `kicktrain pendular --json` prints them.
pub fn pendular_json(molecule: &str, intensity_wcm2: f64, static_kv_cm: f64, temperature_k: f64, r: &PendularResult) -> Value {
    json!({"molecule": molecule, "intensity_wcm2": intensity_wcm2, "static_kv_cm": static_kv_cm,
        "temperature_k": temperature_k, "result": r, "laser_safety": LASER_SAFETY})
}

/// The table of dressed states up to field-free J = `j_max` that `kicktrain pendular` prints.
pub fn pendular_text(molecule: &str, intensity_wcm2: f64, static_kv_cm: f64, temperature_k: f64, j_max: u32, r: &PendularResult) -> String {
    lines(|o| {
        let angle = r.static_angle_deg.map(|a| format!(" at {a:.1}° from Z towards X")).unwrap_or_default();
        writeln!(
            o,
            "{} in {:.3e} W/cm² and {} kV/cm{angle}: laser strength ΔαE0²/4B = {:.3}, dipole strength μE/B = {:.3}",
            molecule,
            intensity_wcm2,
            static_kv_cm,
            no_negative_zero(r.laser_strength_b, 3),
            no_negative_zero(r.static_strength_b, 3)
        )?;
        // A top's levels are named "J Ka Kc" or "J K"; a linear molecule's by J.
        let top = r.states.iter().any(|s| s.level.is_some());
        let tilted = r.thermal_cos_x.is_some();
        let level_width = if top { 10 } else { 4 };
        let first = if top { "level" } else { "J" };
        if tilted {
            writeln!(
                o,
                "{first:>level_width$} {:>5} {:>3} {:>14} {:>12} {:>9} {:>9} {:>9}",
                "|M_f|", "σ", "energy (cm⁻¹)", "energy (B)", "⟨cos²θ⟩", "⟨cosθ⟩", "⟨cosθ_X⟩"
            )?;
        } else {
            writeln!(o, "{first:>level_width$} {:>4} {:>14} {:>12} {:>9} {:>9}", "|M|", "energy (cm⁻¹)", "energy (B)", "⟨cos²θ⟩", "⟨cosθ⟩")?;
        }
        for s in r.states.iter().filter(|s| s.j <= j_max) {
            let name = s.level.clone().unwrap_or_else(|| s.j.to_string());
            if tilted {
                writeln!(
                    o,
                    "{name:>level_width$} {:>5} {:>3} {:>14.6} {:>12.5} {:>9.5} {:>9.5} {:>9.5}",
                    s.m,
                    if s.reflection == Some(-1) { "−" } else { "+" },
                    no_negative_zero(s.energy_cm, 6),
                    no_negative_zero(s.energy_b, 5),
                    s.cos2,
                    no_negative_zero(s.cos, 5),
                    no_negative_zero(s.cos_x.unwrap_or(0.0), 5)
                )?;
            } else {
                writeln!(
                    o,
                    "{name:>level_width$} {:>4} {:>14.6} {:>12.5} {:>9.5} {:>9.5}",
                    s.m,
                    no_negative_zero(s.energy_cm, 6),
                    no_negative_zero(s.energy_b, 5),
                    s.cos2,
                    no_negative_zero(s.cos, 5)
                )?;
            }
        }
        match r.thermal_cos_x {
            Some(x) => writeln!(
                o,
                "thermal adiabatic averages at {temperature_k} K: ⟨cos²θ⟩ = {:.5}, ⟨cosθ⟩ = {:.5}, ⟨cosθ_X⟩ = {:.5}",
                r.thermal_cos2,
                no_negative_zero(r.thermal_cos, 5),
                no_negative_zero(x, 5)
            )?,
            None => writeln!(
                o,
                "thermal adiabatic averages at {temperature_k} K: ⟨cos²θ⟩ = {:.5}, ⟨cosθ⟩ = {:.5}",
                r.thermal_cos2,
                no_negative_zero(r.thermal_cos, 5)
            )?,
        }
        if top {
            writeln!(
                o,
                "(level: the field-free level each state connects to adiabatically, ranked within its exact symmetry class; \
                 populated levels only; ⟨cos²θ⟩ of the alignment axis, ⟨cosθ⟩ of the dipole axis; energies exclude the isotropic polarizability shift)"
            )?;
        } else if tilted {
            writeln!(
                o,
                "(J, |M_f|: the field-free level each state connects to when the static field comes on first and the laser after it; \
                 σ: its class under the reflection through XZ; θ measured from Z, the laser polarization, θ_X from X; \
                 energies exclude the isotropic −¼α⊥E0² shift)"
            )?;
        } else {
            writeln!(o, "(J: the field-free level each state connects to adiabatically; energies exclude the isotropic −¼α⊥E0² shift)")?;
        }
        if intensity_wcm2 > 0.0 {
            writeln!(o, "{LASER_SAFETY}")?;
        }
        Ok(())
    })
}

/// A focus report as `kicktrain focus --json` prints it: [`FocusReport::to_json`] with the laser-safety caution.
pub fn focus_json(r: &FocusReport) -> Value {
    let mut v = r.to_json();
    v["laser_safety"] = json!(LASER_SAFETY);
    v
}

/// What `kicktrain focus` prints: power, waist, intensity, field and fluence, any ionization warning, the caution.
pub fn focus_text(r: &FocusReport) -> String {
    lines(|o| {
        writeln!(o, "pulse energy        {} mJ in {} fs ({:?})", r.focus.energy_mj, r.fwhm_fs, r.shape)?;
        writeln!(o, "peak power          {:.4e} W", r.peak_power_w)?;
        writeln!(o, "focal waist w0      {:.3} µm (1/e² intensity radius)", r.waist_m * 1e6)?;
        if let Some(z) = r.rayleigh_range_mm {
            writeln!(o, "Rayleigh range      {z:.4} mm")?;
        }
        writeln!(o, "peak intensity      {:.4e} W/cm² (on axis, at the focus)", r.peak_intensity_wcm2)?;
        writeln!(o, "peak field          {:.4e} V/m", r.peak_field_v_per_m)?;
        writeln!(o, "peak fluence        {:.4e} J/cm²", r.peak_fluence_j_per_cm2)?;
        if let Some(w) = &r.warning {
            writeln!(o, "warning: {w}")?;
        }
        writeln!(o, "{LASER_SAFETY}")
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_negative_zero_only_clears_rounding_noise() {
        assert_eq!(format!("{:.3}", no_negative_zero(-1e-5, 3)), "0.000");
        assert_eq!(format!("{:.3}", no_negative_zero(-2e-3, 3)), "-0.002");
        assert_eq!(no_negative_zero(0.25, 1), 0.25);
    }

    #[test]
    fn every_line_ends_in_a_newline() {
        let t = molecules_table();
        assert!(t.ends_with("kicktrain molecules --json\n") && t.contains("\n\ntop "), "{t}");
        let s = simulation_text(&json!({"molecule": {"name": "N2"}, "temperature_k": 300, "pulses": []}));
        assert!(s.starts_with("N2 at 300 K\n") && s.ends_with(" s\n") && !s.contains("Laser safety"), "{s}");
    }
}
