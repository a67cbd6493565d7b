//! Reading JSON input objects field by field, so every error names the field path and what was expected.

use crate::error::{Error, Result};
use serde_json::{Map, Value};

/// A JSON object being read; remembers which keys were used so that unknown keys are reported.
pub struct Fields<'a> {
    path: String,
    map: &'a Map<String, Value>,
    used: Vec<String>,
}

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

impl<'a> Fields<'a> {
    /// Start reading `value` (which must be an object) found at `path`.
    pub fn new(value: &'a Value, path: &str) -> Result<Fields<'a>> {
        match value {
            Value::Object(map) => Ok(Fields { path: path.to_string(), map, used: vec![] }),
            other => Err(Error::input(if path.is_empty() { "(top level)" } else { path }, format!("expected an object {{ ... }}, got {}", type_name(other)))),
        }
    }

    /// Path of a key in this object.
    pub fn path_of(&self, key: &str) -> String {
        join(&self.path, key)
    }

    /// The raw value of an optional key.
    pub fn opt_value(&mut self, key: &str) -> Option<&'a Value> {
        self.used.push(key.to_string());
        self.map.get(key)
    }

    /// The raw value of a required key.
    pub fn req_value(&mut self, key: &str, what: &str) -> Result<&'a Value> {
        self.opt_value(key).ok_or_else(|| Error::input(self.path_of(key), format!("missing; expected {what}")))
    }

    /// An optional number (finite); `unit` goes into the error message.
    pub fn opt_f64(&mut self, key: &str, unit: &str) -> Result<Option<f64>> {
        match self.opt_value(key) {
            None => Ok(None),
            Some(v) => as_f64(v, &self.path_of(key), unit).map(Some),
        }
    }

    /// A required number (finite).
    pub fn req_f64(&mut self, key: &str, unit: &str) -> Result<f64> {
        let v = self.req_value(key, &format!("a number ({unit})"))?;
        as_f64(v, &self.path_of(key), unit)
    }

    /// An optional string.
    pub fn opt_str(&mut self, key: &str, what: &str) -> Result<Option<&'a str>> {
        match self.opt_value(key) {
            None => Ok(None),
            Some(Value::String(s)) => Ok(Some(s.as_str())),
            Some(other) => Err(Error::input(self.path_of(key), format!("expected {what}, got {}", type_name(other)))),
        }
    }

    /// An optional non-negative integer.
    pub fn opt_usize(&mut self, key: &str, what: &str) -> Result<Option<usize>> {
        match self.opt_value(key) {
            None => Ok(None),
            Some(v) => match v.as_u64() {
                Some(n) => Ok(Some(n as usize)),
                None => Err(Error::input(self.path_of(key), format!("expected {what} (a whole number ≥ 0), got {v}"))),
            },
        }
    }

    /// An optional boolean.
    pub fn opt_bool(&mut self, key: &str) -> Result<Option<bool>> {
        match self.opt_value(key) {
            None => Ok(None),
            Some(Value::Bool(b)) => Ok(Some(*b)),
            Some(other) => Err(Error::input(self.path_of(key), format!("expected true or false, got {}", type_name(other)))),
        }
    }

    /// Finish: any key not read is an error listing the accepted keys.
    pub fn finish(self) -> Result<()> {
        for k in self.map.keys() {
            if !self.used.iter().any(|u| u == k) {
                let mut accepted = self.used.clone();
                accepted.sort();
                accepted.dedup();
                return Err(Error::input(self.path_of(k), format!("unknown key; accepted keys here: {}", accepted.join(", "))));
            }
        }
        Ok(())
    }
}

/// A finite number from a JSON value, or an error naming `path` and `unit`.
pub fn as_f64(v: &Value, path: &str, unit: &str) -> Result<f64> {
    match v.as_f64() {
        Some(x) if x.is_finite() => Ok(x),
        _ => Err(Error::input(path, format!("expected a number ({unit}), got {}", if v.is_number() { v.to_string() } else { type_name(v).to_string() }))),
    }
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
