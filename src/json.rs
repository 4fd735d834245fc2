//! Strict JSON reading for documents the tool did not write itself in this run
//! (reports given to `recheck`, SigMF sidecars).
//!
//! Takes in: JSON text. Gives out: a [`serde_json::Value`] tree, or the
//! [`serde_json::Error`] with its line and column. Strict means: one document
//! and nothing after it but whitespace, and **no object with the same key
//! twice**. Plain `serde_json::from_str::<Value>` keeps the last of two equal
//! keys silently (RFC 8259 §4 leaves the behaviour to the reader), so a
//! document could say one thing to another reader and another to this one; a
//! typed struct read by serde's derive already refuses a repeated field, and
//! this gives untyped trees the same rule. The nesting limit is serde_json's
//! (128 levels), as for every other document.

use serde::de::{self, Deserialize, Deserializer, MapAccess, SeqAccess, Visitor};
use serde_json::{Map, Value};

/// A [`Value`] whose objects never repeat a key.
struct Strict(Value);

impl<'de> Deserialize<'de> for Strict {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(StrictVisitor).map(Strict)
    }
}

struct StrictVisitor;

impl<'de> Visitor<'de> for StrictVisitor {
    type Value = Value;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str("any JSON value")
    }

    fn visit_bool<E: de::Error>(self, v: bool) -> Result<Value, E> {
        Ok(Value::Bool(v))
    }

    fn visit_i64<E: de::Error>(self, v: i64) -> Result<Value, E> {
        Ok(Value::from(v))
    }

    fn visit_u64<E: de::Error>(self, v: u64) -> Result<Value, E> {
        Ok(Value::from(v))
    }

    fn visit_f64<E: de::Error>(self, v: f64) -> Result<Value, E> {
        // As serde_json's own Value: a non-finite number (impossible in JSON
        // text) would become null.
        Ok(serde_json::Number::from_f64(v).map_or(Value::Null, Value::Number))
    }

    fn visit_str<E: de::Error>(self, v: &str) -> Result<Value, E> {
        Ok(Value::String(v.to_owned()))
    }

    fn visit_string<E: de::Error>(self, v: String) -> Result<Value, E> {
        Ok(Value::String(v))
    }

    fn visit_unit<E: de::Error>(self) -> Result<Value, E> {
        Ok(Value::Null)
    }

    fn visit_none<E: de::Error>(self) -> Result<Value, E> {
        Ok(Value::Null)
    }

    fn visit_some<D: Deserializer<'de>>(self, d: D) -> Result<Value, D::Error> {
        Strict::deserialize(d).map(|s| s.0)
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Value, A::Error> {
        let mut out = Vec::new();
        while let Some(Strict(v)) = seq.next_element()? {
            out.push(v);
        }
        Ok(Value::Array(out))
    }

    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Value, A::Error> {
        let mut out = Map::new();
        while let Some(key) = map.next_key::<String>()? {
            if out.contains_key(&key) {
                return Err(de::Error::custom(format_args!(
                    "duplicate key `{}`",
                    crate::text::escape_controls(&key)
                )));
            }
            let Strict(v) = map.next_value()?;
            out.insert(key, v);
        }
        Ok(Value::Object(out))
    }
}

/// Parse `text` as one JSON document, refusing a repeated key in any object
/// and anything but whitespace after the document.
///
/// # Errors
/// The [`serde_json::Error`] (syntax, a repeated key, trailing characters,
/// nesting deeper than 128), with its line and column.
pub fn parse_strict(text: &str) -> Result<Value, serde_json::Error> {
    let mut de = serde_json::Deserializer::from_str(text);
    let Strict(v) = Strict::deserialize(&mut de)?;
    de.end()?;
    Ok(v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_document_without_repeated_keys_reads_as_serde_json_reads_it() {
        // Reference: serde_json's own `Value` parser (the behaviour compared).
        let text = r#"{"a":[1,-2,3.5,"x",null,true,{"b":{}}],"c":1e300,"d":18446744073709551615}"#;
        let want: Value = serde_json::from_str(text).unwrap();
        assert_eq!(parse_strict(text).unwrap(), want);
    }

    #[test]
    fn a_repeated_key_at_any_depth_is_refused_and_named() {
        // RFC 8259 §4: names within an object SHOULD be unique.
        for text in [r#"{"a":1,"a":2}"#, r#"{"x":[{"k":1,"k":1}]}"#] {
            let e = parse_strict(text).unwrap_err().to_string();
            assert!(e.contains("duplicate key"), "{text}: {e}");
        }
        // The same key in two different objects is not a repeat.
        assert!(parse_strict(r#"{"a":{"k":1},"b":{"k":2}}"#).is_ok());
    }

    #[test]
    fn trailing_data_and_deep_nesting_are_refused() {
        // serde_json: trailing characters after the value; recursion limit 128.
        assert!(parse_strict("{} {}").is_err());
        assert!(parse_strict("{}\n  \t").is_ok());
        let deep = format!("{}{}", "[".repeat(200), "]".repeat(200));
        assert!(parse_strict(&deep).is_err());
    }
}
