//! Reading input files: JSON text into the serde file types of `scenario_file` and `objective_file`,
//! with errors that name the full path of the offending key and what was expected there.

pub mod objective_file;
pub mod scenario_file;
mod strict;

use crate::error::{Error, Result};
use serde::de::DeserializeOwned;
use serde_json::Value;

/// Human name of a JSON value's type.
pub fn type_name(v: &Value) -> &'static str {
    match v {
        Value::Null => "null",
        Value::Bool(_) => "a boolean",
        Value::Number(_) => "a number",
        Value::String(_) => "a string",
        Value::Array(_) => "an array",
        Value::Object(_) => "an object",
    }
}

/// Join a parent path and a key ("" + "a" = "a", "p" + "a" = "p.a").
pub fn join(path: &str, key: &str) -> String {
    if path.is_empty() { key.to_string() } else { format!("{path}.{key}") }
}

/// Read `value`, found at `path`, into the file type `T` (whose structs refuse unknown keys). Errors
/// name the full path of the offending key and say what was expected, with the unit the key carries.
pub fn read<T: DeserializeOwned>(value: &Value, path: &str) -> Result<T> {
    if !value.is_object() {
        let at = if path.is_empty() { "(top level)" } else { path };
        return Err(Error::input(at, format!("expected an object {{ ... }}, got {}", type_name(value))));
    }
    serde_path_to_error::deserialize(strict::Strict(value)).map_err(|e| {
        let inner = e.path().to_string();
        let at = if inner == "." { path.to_string() } else { join(path, &inner) };
        explain(&at, &e.inner().to_string())
    })
}

/// Turn one of serde's messages about the value at `at` into ours.
fn explain(at: &str, message: &str) -> Error {
    let ticked = |s: &str| -> Vec<String> { s.split('`').skip(1).step_by(2).map(str::to_string).collect() };
    let place = |p: &str| if p.is_empty() { "(top level)".to_string() } else { p.to_string() };
    if let Some(rest) = message.strip_prefix("missing field ") {
        let key = ticked(rest).into_iter().next().unwrap_or_default();
        let full = join(at, &key);
        let what = match unit_of(&full) {
            Some(unit) => format!("a number ({unit})"),
            None => "a value".to_string(),
        };
        return Error::input(full, format!("missing; expected {what}"));
    }
    if let Some(rest) = message.strip_prefix("unknown field ") {
        let mut names = ticked(rest);
        let given = if names.is_empty() { String::new() } else { names.remove(0) };
        names.sort();
        let near = names.iter().map(|n| (crate::error::edit_distance(&given, n), n)).filter(|(d, _)| *d <= 2).min();
        let hint = near.map(|(_, n)| format!(" (did you mean {n}?)")).unwrap_or_default();
        return Error::input(place(at), format!("unknown key{hint}; accepted keys here: {}", names.join(", ")));
    }
    if let Some(rest) = message.strip_prefix("unknown variant ") {
        let names = ticked(rest);
        if let Some((given, accepted)) = names.split_first() {
            return Error::input(place(at), format!("expected {}, got \"{given}\"", one_of(accepted.iter().map(String::as_str))));
        }
    }
    if let Some(rest) = message.strip_prefix("invalid length ") {
        let (n, expected) = rest.split_once(", expected ").unwrap_or((rest, "another length"));
        let expected = expectation(at).map(str::to_string).unwrap_or_else(|| expected.to_string());
        return Error::input(place(at), format!("expected {expected}, got {n} items"));
    }
    let kind = message.strip_prefix("invalid type: ").or_else(|| message.strip_prefix("invalid value: "));
    if let Some(rest) = kind
        && let Some((got, expected)) = rest.split_once(", expected ")
    {
        let whole = expected.starts_with('u');
        let got = match got.split_once(' ') {
            Some(("string", v)) if whole => v.to_string(),
            Some(("string", _)) => "a string".to_string(),
            Some(("boolean", _)) => "a boolean".to_string(),
            Some(("integer", v)) | Some(("floating", v)) if whole => {
                let v = v.trim_start_matches("point ").trim_matches('`');
                v.parse::<i64>().map(|x| x.to_string()).or_else(|_| v.parse::<f64>().map(|x| Value::from(x).to_string())).unwrap_or_else(|_| v.to_string())
            }
            Some(("integer", _)) | Some(("floating", _)) => "a number".to_string(),
            _ => match got {
                "sequence" => "an array".to_string(),
                "map" => "an object".to_string(),
                "unit value" | "null" => "null".to_string(),
                other => other.to_string(),
            },
        };
        let unit = unit_of(at).map(|u| format!(" ({u})")).unwrap_or_default();
        let expected = match (expectation(at), expected) {
            (Some(text), _) => text.to_string(),
            (None, "f64") => format!("a number{unit}"),
            (None, other) if other.starts_with("a number or") => format!("{other}{unit}"),
            (None, expected) => match expected {
                "usize" | "u64" | "u32" => "a whole number ≥ 0".to_string(),
                "a boolean" => "true or false".to_string(),
                "a borrowed string" | "a string" => "a string".to_string(),
                other if other.starts_with("struct ") || other == "a map" => "an object { ... }".to_string(),
                "a sequence" => "an array".to_string(),
                other => other.to_string(),
            },
        };
        return Error::input(place(at), format!("expected {expected}, got {got}"));
    }
    Error::input(place(at), message.to_string())
}

/// Names as a list for a message: "\"a\", \"b\" or \"c\"".
pub(crate) fn one_of<'a>(names: impl Iterator<Item = &'a str>) -> String {
    let quoted: Vec<String> = names.map(|n| format!("\"{n}\"")).collect();
    match quoted.split_last() {
        None => "nothing".to_string(),
        Some((last, [])) => last.clone(),
        Some((last, rest)) => format!("{} or {last}", rest.join(", ")),
    }
}

/// What a key expects, where that is more than "a number (unit)" or a list of names.
fn expectation(path: &str) -> Option<&'static str> {
    const KEYS: [(&str, &str); 8] = [
        ("window_ps", "[start_ps, stop_ps] after the last pulse centre"),
        ("spin_weights", "[even_J, odd_J] (two numbers)"),
        ("dipole_axis", "\"a\", \"b\" or \"c\""),
        ("alignment_axis", "\"a\", \"b\" or \"c\""),
        ("kind", "\"peak\", \"value_at\", \"mean\" or \"minimum\""),
        ("count", "the number of pulses (a whole number ≥ 0)"),
        ("max_count", "the largest number of pulses (a whole number ≥ 0)"),
        ("seed", "a seed (a whole number ≥ 0)"),
    ];
    let key = path.rsplit('.').next().unwrap_or(path);
    KEYS.iter().find(|(k, _)| *k == key).map(|(_, t)| *t)
}

/// The unit of the number at `path`, read from its key: kicktrain's keys end in their unit
/// (`fwhm_fs`, `peak_intensity_wcm2`); entries of a list or a range (`[0]`, `min`, `max`) and the
/// principal components `a`, `b`, `c` take the unit of the key they belong to.
pub fn unit_of(path: &str) -> Option<&'static str> {
    const NAMED: [(&str, &str); 13] = [
        ("m2", "beam quality factor"),
        ("pump_m2", "beam quality factor M²"),
        ("probe_m2", "beam quality factor M²"),
        ("ellipticity", "minor-to-major field ratio, 0 to 1"),
        ("probe_order", "probe nonlinearity order"),
        ("second_harmonic_ratio", "second-harmonic to fundamental intensity ratio"),
        ("thermal_tolerance", "population fraction"),
        ("edge_tolerance", "population fraction"),
        ("max_steps", "time steps"),
        ("max_states", "initial states"),
        ("agreement", "units of the observable"),
        ("max_ionized_fraction", "fraction of molecules ionized per pulse"),
        ("spin_weights", "relative weight"),
    ];
    const SUFFIXES: [(&str, &str); 19] = [
        ("_kv_cm", "kV/cm"),
        ("_wcm2", "W/cm²"),
        ("_jcm2", "J/cm²"),
        ("_fs", "fs"),
        ("_ps", "ps"),
        ("temperature_k", "K"),
        ("_deg", "degrees"),
        ("_a3", "Å³"),
        ("_au", "atomic units, Taylor convention"),
        ("_debye", "debye"),
        ("_cm", "cm⁻¹"),
        ("_mj", "mJ"),
        ("_um", "µm"),
        ("_mm", "mm"),
        ("_nm", "nm"),
        ("_ev", "eV"),
        ("_rad", "rad"),
        ("_percent", "%"),
        ("_s", "s"),
    ];
    let segments = path.split('.').flat_map(|s| s.split('[')).rev();
    for seg in segments {
        let key = seg.trim_end_matches(']');
        if key.is_empty() || key.chars().all(|c| c.is_ascii_digit()) || ["min", "max", "a", "b", "c"].contains(&key) {
            continue;
        }
        if let Some((_, unit)) = NAMED.iter().find(|(k, _)| *k == key) {
            return Some(unit);
        }
        if key.starts_with("spin_weights") {
            return Some("relative weight");
        }
        return SUFFIXES.iter().find(|(s, _)| key.ends_with(s)).map(|(_, u)| *u);
    }
    None
}

/// Parse a JSON text; syntax errors report line and column.
pub fn parse_json(text: &str, file: &str) -> Result<Value> {
    serde_json::from_str(text).map_err(|e| Error::input(file, format!("not valid JSON: {e}")))
}

/// Largest input file read (scenarios and objectives are a few kB).
pub const MAX_INPUT_BYTES: u64 = 16 << 20;

/// Read an input file of at most [`MAX_INPUT_BYTES`] as UTF-8 text (never echoing its contents).
pub fn read_text_file(path: &std::path::Path) -> Result<String> {
    use std::io::Read;
    let field = path.display().to_string();
    let file = std::fs::File::open(path).map_err(|e| Error::input(&field, format!("cannot read the file: {e}")))?;
    let mut bytes = vec![];
    file.take(MAX_INPUT_BYTES + 1).read_to_end(&mut bytes).map_err(|e| Error::input(&field, format!("cannot read the file: {e}")))?;
    if bytes.len() as u64 > MAX_INPUT_BYTES {
        return Err(Error::input(&field, format!("expected an input file of at most {} MiB", MAX_INPUT_BYTES >> 20)));
    }
    String::from_utf8(bytes).map_err(|e| Error::input(&field, format!("expected UTF-8 text (invalid byte at offset {})", e.utf8_error().valid_up_to())))
}

#[cfg(test)]
mod tests {
    use super::scenario_file::scenario;
    use serde_json::json;

    fn error(v: serde_json::Value) -> String {
        scenario(&v, "").unwrap_err().to_string()
    }

    fn good() -> serde_json::Value {
        json!({"molecule": "N2", "temperature_k": 300,
               "pulses": [{"center_ps": 0.0, "fwhm_fs": 50, "peak_intensity_wcm2": 5e13}],
               "window": {"start_ps": 0.2, "stop_ps": 12.0, "step_fs": 20}})
    }

    #[test]
    fn errors_name_the_full_path_and_the_unit_of_the_key() {
        let mut v = good();
        v["pulses"][0]["fwhm_fs"] = json!("50");
        assert_eq!(error(v), "pulses[0].fwhm_fs: expected a number (fs), got a string");
        let mut v = good();
        v["window"].as_object_mut().unwrap().remove("step_fs");
        assert_eq!(error(v), "window.step_fs: missing; expected a number (fs)");
        let mut v = good();
        v["pulses"][0]["colour"] = json!(1);
        let e = error(v);
        assert!(e.starts_with("pulses[0].colour: unknown key; accepted keys here: beam_radius_mm, center_ps, cut_fs,"), "{e}");
        let mut v = good();
        v["pulses"][0]["shape"] = json!("square");
        assert_eq!(error(v), "pulses[0].shape: expected \"gaussian\", \"sech2\", \"flat_top\" or \"truncated\", got \"square\"");
        let mut v = good();
        v["solver"] = json!({"method": 3});
        assert_eq!(error(v), "solver.method: expected \"auto\", \"kick\" or \"finite\", got a number");
        let mut v = good();
        v["molecule"] = json!({"b_cm": 1.0, "alpha_parallel_a3": 2, "alpha_perpendicular_a3": 1, "spin_weights": [1, 2, 3]});
        assert_eq!(error(v), "molecule.spin_weights: expected [even_J, odd_J] (two numbers), got 3 items");
    }

    #[test]
    fn a_present_null_and_an_array_for_an_object_are_refused() {
        // serde alone would read `null` as an absent optional key, and an array as a struct by position.
        let mut v = good();
        v["pulses"][0]["rise_fs"] = json!(null);
        assert_eq!(error(v), "pulses[0].rise_fs: expected a number (fs), got null");
        let mut v = good();
        v["window"] = json!([0.2, 12.0, 20]);
        assert_eq!(error(v), "window: expected an object { ... }, got an array");
        let mut v = good();
        v["pulses"][0]["polarization"] = json!([0, 0.5]);
        assert_eq!(error(v), "pulses[0].polarization: expected an object { ... }, got an array");
        assert_eq!(error(json!([])), "(top level): expected an object { ... }, got an array");
    }

    #[test]
    fn units_follow_the_key_name() {
        use super::unit_of;
        assert_eq!(unit_of("pulses[3].peak_intensity_wcm2"), Some("W/cm²"));
        assert_eq!(unit_of("static_field.strength_kv_cm"), Some("kV/cm"));
        assert_eq!(unit_of("molecule.b_cm"), Some("cm⁻¹"));
        assert_eq!(unit_of("molecule.polarizability_a3.b"), Some("Å³"));
        assert_eq!(unit_of("pulses.each[1].delay_ps.max"), Some("ps"));
        assert_eq!(unit_of("temperature_k"), Some("K"));
        assert_eq!(unit_of("search.time_limit_s"), Some("s"));
        assert_eq!(unit_of("description"), None);
    }
}
