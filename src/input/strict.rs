//! A serde deserializer over a parsed JSON value that refuses what serde's own would quietly accept:
//! an array where an object is expected (serde's derived structs also read fields by position).
//! Everything else behaves as `serde_json::Value`'s deserializer.

use serde::de::value::{Error, MapDeserializer, SeqDeserializer};
use serde::de::{self, Deserializer, IntoDeserializer, Unexpected, Visitor};
use serde_json::Value;

/// A JSON value read strictly.
#[derive(Clone, Copy)]
pub struct Strict<'a>(pub &'a Value);

impl<'a> IntoDeserializer<'a, Error> for Strict<'a> {
    type Deserializer = Self;
    fn into_deserializer(self) -> Self {
        self
    }
}

fn unexpected(v: &Value) -> Unexpected<'_> {
    match v {
        Value::Null => Unexpected::Unit,
        Value::Bool(b) => Unexpected::Bool(*b),
        Value::Number(n) => match (n.as_u64(), n.as_i64()) {
            (Some(u), _) => Unexpected::Unsigned(u),
            (None, Some(i)) => Unexpected::Signed(i),
            _ => Unexpected::Float(n.as_f64().unwrap_or(f64::NAN)),
        },
        Value::String(s) => Unexpected::Str(s),
        Value::Array(_) => Unexpected::Seq,
        Value::Object(_) => Unexpected::Map,
    }
}

impl<'de> Deserializer<'de> for Strict<'de> {
    type Error = Error;

    fn deserialize_any<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, Error> {
        match self.0 {
            Value::Null => visitor.visit_unit(),
            Value::Bool(b) => visitor.visit_bool(*b),
            Value::Number(n) => match (n.as_u64(), n.as_i64()) {
                (Some(u), _) => visitor.visit_u64(u),
                (None, Some(i)) => visitor.visit_i64(i),
                _ => visitor.visit_f64(n.as_f64().unwrap_or(f64::NAN)),
            },
            Value::String(s) => visitor.visit_borrowed_str(s),
            Value::Array(items) => {
                let mut seq = SeqDeserializer::new(items.iter().map(Strict));
                let out = visitor.visit_seq(&mut seq)?;
                seq.end()?;
                Ok(out)
            }
            Value::Object(map) => {
                let mut m = MapDeserializer::new(map.iter().map(|(k, v)| (k.as_str(), Strict(v))));
                let out = visitor.visit_map(&mut m)?;
                m.end()?;
                Ok(out)
            }
        }
    }

    /// A key that is present holds a value: `null` is refused by the type inside (as a number, a
    /// name, an object, ...) rather than read as an absent key.
    fn deserialize_option<V: Visitor<'de>>(self, visitor: V) -> Result<V::Value, Error> {
        visitor.visit_some(self)
    }

    fn deserialize_struct<V: Visitor<'de>>(self, _name: &'static str, _fields: &'static [&'static str], visitor: V) -> Result<V::Value, Error> {
        match self.0 {
            Value::Object(_) => self.deserialize_any(visitor),
            other => Err(de::Error::invalid_type(unexpected(other), &"an object { ... }")),
        }
    }

    fn deserialize_newtype_struct<V: Visitor<'de>>(self, _name: &'static str, visitor: V) -> Result<V::Value, Error> {
        visitor.visit_newtype_struct(self)
    }

    fn deserialize_enum<V: Visitor<'de>>(self, _name: &'static str, variants: &'static [&'static str], visitor: V) -> Result<V::Value, Error> {
        match self.0 {
            Value::String(s) => visitor.visit_enum(s.as_str().into_deserializer()),
            other => Err(de::Error::invalid_type(unexpected(other), &OneOf(variants))),
        }
    }

    serde::forward_to_deserialize_any! {
        bool i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 f32 f64 char str string
        bytes byte_buf unit unit_struct seq tuple tuple_struct map identifier ignored_any
    }
}

/// "\"a\", \"b\" or \"c\"": the names a key accepts.
struct OneOf(&'static [&'static str]);

impl de::Expected for OneOf {
    fn fmt(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str(&super::one_of(self.0.iter().copied()))
    }
}
