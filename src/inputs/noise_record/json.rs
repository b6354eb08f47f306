//! Loading JSON text into a [`serde_json::Value`] while noticing duplicated keys.
//!
//! `serde_json::Value` keeps the last of two equal keys without a word, so a record that says
//! `"amplitude"` twice would silently lose one of them. This loader drives serde_json's own
//! deserializer (same grammar, RFC 8259; same recursion limit of 128 nested arrays/objects,
//! which turns deep nesting into an error instead of a stack overflow; same correctly rounded
//! number parsing through the `float_roundtrip` feature) but builds the tree itself and records
//! every duplicated key with its JSON pointer (RFC 6901). The tree keeps the last value, as
//! serde_json would, so that the rest of the record can still be checked in the same round.

use serde::de::{self, DeserializeSeed, MapAccess, SeqAccess, Visitor};
use serde_json::{Map, Number, Value};
use std::collections::BTreeSet;
use std::fmt;

use super::pointer::{child_index, child_key};
use crate::Problem;

/// A loaded document and the duplicated keys found in it.
#[derive(Debug)]
pub(super) struct Loaded {
    pub value: Value,
    /// One problem per duplicated key (per object), in document order.
    pub duplicates: Vec<Problem>,
}

/// Parses `text` as one JSON document; a syntax error becomes a single problem at `/`.
pub(super) fn load(text: &str) -> Result<Loaded, Problem> {
    if text.trim().is_empty() {
        return Err(Problem::new(
            "/",
            "is empty (no JSON value in it); was the file written completely? A noise record is \
             one JSON object (see docs/noise-record.md)",
        ));
    }
    let mut duplicates = Vec::new();
    let mut de = serde_json::Deserializer::from_str(text);
    let value = Seed {
        pointer: String::new(),
        duplicates: &mut duplicates,
    }
    .deserialize(&mut de)
    .map_err(|e| syntax_problem(text, &e))?;
    de.end().map_err(|e| syntax_problem(text, &e))?;
    Ok(Loaded { value, duplicates })
}

/// Whether the line of `text` where `e` occurred holds `NaN` or `Infinity`, which JavaScript
/// and Python write for non-finite numbers but JSON (RFC 8259 §6) does not allow.
fn non_finite_literal(text: &str, e: &serde_json::Error) -> bool {
    let line = text.lines().nth(e.line().saturating_sub(1)).unwrap_or("");
    line.contains("NaN") || line.contains("Infinity")
}

/// Turns a serde_json error into a problem that gives the line, the column and a fix.
fn syntax_problem(text: &str, e: &serde_json::Error) -> Problem {
    let full = e.to_string();
    // serde_json appends " at line L column C"; we state the place ourselves.
    let what = match full.rfind(" at line ") {
        Some(cut) => full[..cut].to_string(),
        None => full.clone(),
    };
    let fix = if what.contains("recursion limit") {
        "the arrays/objects are nested more than 128 levels deep; a noise record needs at most 5"
    } else if what.contains("number out of range") {
        "a number is too large for a 64-bit float (beyond about 1.8e308); write a finite value"
    } else if non_finite_literal(text, e) {
        "NaN and Infinity are not JSON numbers (RFC 8259 §6); every value of a noise record must \
         be a finite number"
    } else if text.starts_with('\u{feff}') {
        "the file starts with more than one byte-order mark (U+FEFF); remove them and save the \
         file as UTF-8"
    } else if e.is_eof() {
        "the file ends too early; close every string, array and object"
    } else {
        "fix the JSON syntax there"
    };
    Problem::new(
        "/",
        format!(
            "is not valid JSON at line {}, column {} ({what}); {fix}",
            e.line(),
            e.column()
        ),
    )
}

/// Deserializes one value at `pointer`, recording duplicated keys below it.
struct Seed<'a> {
    pointer: String,
    duplicates: &'a mut Vec<Problem>,
}

impl<'de> DeserializeSeed<'de> for Seed<'_> {
    type Value = Value;

    fn deserialize<D: de::Deserializer<'de>>(self, deserializer: D) -> Result<Value, D::Error> {
        deserializer.deserialize_any(self)
    }
}

impl<'de> Visitor<'de> for Seed<'_> {
    type Value = Value;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("any JSON value")
    }

    fn visit_bool<E: de::Error>(self, v: bool) -> Result<Value, E> {
        Ok(Value::Bool(v))
    }

    fn visit_i64<E: de::Error>(self, v: i64) -> Result<Value, E> {
        Ok(Value::Number(v.into()))
    }

    fn visit_u64<E: de::Error>(self, v: u64) -> Result<Value, E> {
        Ok(Value::Number(v.into()))
    }

    fn visit_f64<E: de::Error>(self, v: f64) -> Result<Value, E> {
        // serde_json never hands over a non-finite number, but do not rely on it.
        Number::from_f64(v)
            .map(Value::Number)
            .ok_or_else(|| E::custom("number out of range"))
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

    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Value, A::Error> {
        let mut out = Vec::new();
        loop {
            let seed = Seed {
                pointer: child_index(&self.pointer, out.len()),
                duplicates: &mut *self.duplicates,
            };
            match seq.next_element_seed(seed)? {
                Some(v) => out.push(v),
                None => break,
            }
        }
        Ok(Value::Array(out))
    }

    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Value, A::Error> {
        let mut out = Map::new();
        let mut reported = BTreeSet::new();
        while let Some(key) = map.next_key::<String>()? {
            let pointer = child_key(&self.pointer, &key);
            let value = map.next_value_seed(Seed {
                pointer: pointer.clone(),
                duplicates: &mut *self.duplicates,
            })?;
            if out.contains_key(&key) && reported.insert(key.clone()) {
                self.duplicates.push(Problem::new(
                    pointer,
                    format!(
                        "the key `{key}` appears more than once in this object; keep exactly one \
                         (JSON readers disagree on which one wins)"
                    ),
                ));
            }
            out.insert(key, value);
        }
        Ok(Value::Object(out))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn duplicated_keys_are_reported_with_their_pointer_and_the_last_value_is_kept() {
        let l = load(r#"{"a": 1, "b": {"c": 2, "c": 3, "c": 4}, "a": 5}"#).unwrap();
        let paths: Vec<&str> = l.duplicates.iter().map(|p| p.path.as_str()).collect();
        assert_eq!(paths, ["/b/c", "/a"]);
        assert_eq!(l.value["a"], 5);
        assert_eq!(l.value["b"]["c"], 4);
    }

    #[test]
    fn duplicates_inside_arrays_get_the_array_index_in_the_pointer() {
        let l = load(r#"{"s": [{}, {"x/y": 1, "x/y": 2}]}"#).unwrap();
        // RFC 6901: `/` inside a key is written `~1`.
        assert_eq!(l.duplicates[0].path, "/s/1/x~1y");
    }

    #[test]
    fn syntax_errors_give_line_and_column() {
        let e = load("{\n  \"a\": 1,\n  \"b\" 2\n}").unwrap_err();
        assert_eq!(e.path, "/");
        assert!(e.message.contains("line 3, column 7"), "{}", e.message);
    }

    #[test]
    fn numbers_beyond_binary64_are_an_error_not_infinity() {
        let e = load(r#"{"a": 1e400}"#).unwrap_err();
        assert!(e.message.contains("too large"), "{}", e.message);
        // The smallest subnormal still parses (IEEE 754 binary64 has 4.9e-324).
        assert!(load(r#"{"a": 5e-324}"#).is_ok());
    }

    #[test]
    fn deep_nesting_is_an_error_not_a_stack_overflow() {
        let text = format!("{}{}", "[".repeat(100_000), "]".repeat(100_000));
        let e = load(&text).unwrap_err();
        assert!(e.message.contains("nested more than 128"), "{}", e.message);
    }

    #[test]
    fn non_finite_literals_empty_text_and_a_second_mark_get_their_own_fix() {
        for text in ["{\"a\": NaN}", "{\"a\": -Infinity}", "[Infinity]"] {
            let e = load(text).unwrap_err();
            assert!(
                e.message.contains("NaN and Infinity are not JSON"),
                "{}",
                e.message
            );
        }
        for text in ["", " \n\t"] {
            assert!(load(text).unwrap_err().message.contains("is empty"));
        }
        let e = load("\u{feff}{}").unwrap_err();
        assert!(e.message.contains("byte-order mark"), "{}", e.message);
    }

    #[test]
    fn trailing_content_after_the_document_is_an_error() {
        let e = load("{} {}").unwrap_err();
        assert!(e.message.contains("line 1, column 4"), "{}", e.message);
    }
}
