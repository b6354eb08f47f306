//! The typed getters of the noise-record walker: each reads one JSON value (an object with its
//! allowed keys, a string, a number, an integer, a choice among spellings), records a problem
//! at its JSON pointer when the value is wrong, and returns `None` then.

use serde_json::{Map, Value};

use crate::inputs::noise_record::pointer::{child_key, suggest};
use crate::model::units::TimeUnit;

use super::*;

/// What kind of JSON value `v` is, for messages.
pub(super) fn kind(v: &Value) -> &'static str {
    match v {
        Value::Null => "null",
        Value::Bool(_) => "a boolean",
        Value::Number(_) => "a number",
        Value::String(_) => "a string",
        Value::Array(_) => "an array",
        Value::Object(_) => "an object",
    }
}

/// Checks that `v` is an object with only the keys of `fields` and all the required ones.
pub(super) fn object<'a>(
    ctx: &mut Ctx,
    v: &'a Value,
    path: &str,
    what: &str,
    fields: &[Field],
) -> Option<&'a Map<String, Value>> {
    let Value::Object(map) = v else {
        ctx.push(
            path,
            format!("must be {what} (a JSON object), got {}", kind(v)),
        );
        return None;
    };
    let known: Vec<&str> = fields.iter().map(|f| f.key).collect();
    unknown_keys(ctx, map, path, &known, |_| None);
    for f in fields.iter().filter(|f| f.required) {
        if !map.contains_key(f.key) {
            ctx.push(
                path,
                format!(
                    "the required key `{}` is missing; add it: {}",
                    f.key, f.hint
                ),
            );
        }
    }
    Some(map)
}

/// Reports every key of `map` not in `known`; `special` may give a better message for a key.
pub(super) fn unknown_keys(
    ctx: &mut Ctx,
    map: &Map<String, Value>,
    path: &str,
    known: &[&str],
    special: impl Fn(&str) -> Option<String>,
) {
    for key in map.keys().filter(|k| !known.contains(&k.as_str())) {
        let message = special(key).unwrap_or_else(|| match suggest(key, known) {
            Some(s) => format!("unknown key `{key}`; did you mean `{s}`?"),
            None if known.is_empty() => format!("unknown key `{key}`; no keys are allowed here"),
            None => format!(
                "unknown key `{key}`; the keys allowed here are {}",
                quoted_list(known)
            ),
        });
        ctx.push(&child_key(path, key), message);
    }
}

pub(super) fn quoted_list(items: &[&str]) -> String {
    items
        .iter()
        .map(|k| format!("`{k}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A string value, or a problem.
pub(super) fn string<'a>(ctx: &mut Ctx, v: &'a Value, path: &str, hint: &str) -> Option<&'a str> {
    match v {
        Value::String(s) => Some(s),
        other => {
            ctx.push(
                path,
                format!("must be a string ({hint}), got {}", kind(other)),
            );
            None
        }
    }
}

/// A finite number, or a problem. (serde_json cannot hold a non-finite number; the check is
/// kept so that the rule does not depend on it.)
pub(super) fn number(ctx: &mut Ctx, v: &Value, path: &str, hint: &str) -> Option<f64> {
    match v.as_f64() {
        Some(x) if x.is_finite() => Some(x),
        Some(_) => {
            ctx.push(path, format!("must be a finite number ({hint})"));
            None
        }
        None => {
            ctx.push(path, format!("must be a number ({hint}), got {}", kind(v)));
            None
        }
    }
}

/// A number `≥ 0`.
pub(super) fn non_negative(ctx: &mut Ctx, v: &Value, path: &str, hint: &str) -> Option<f64> {
    let x = number(ctx, v, path, hint)?;
    if x < 0.0 {
        ctx.push(path, format!("must be ≥ 0, got {x} ({hint})"));
        return None;
    }
    Some(x)
}

/// A number `> 0`.
pub(super) fn positive(ctx: &mut Ctx, v: &Value, path: &str, hint: &str) -> Option<f64> {
    let x = number(ctx, v, path, hint)?;
    if x <= 0.0 {
        ctx.push(path, format!("must be > 0, got {x} ({hint})"));
        return None;
    }
    Some(x)
}

/// A non-negative integer. As in JSON Schema, a number with zero fractional part counts
/// (`3.0` is 3), so the parser and `schemas/noise-record.schema.json` agree.
pub(super) fn integer(v: &Value) -> Option<u64> {
    if let Some(u) = v.as_u64() {
        return Some(u);
    }
    match v.as_f64() {
        // 2^53: above it not every integer is representable, so refuse rather than guess.
        Some(x) if x >= 0.0 && x.fract() == 0.0 && x <= 9_007_199_254_740_992.0 => Some(x as u64),
        _ => None,
    }
}

/// A time unit (`s`, `ms`, `us`, `ns`), spelled as in files.
pub(super) fn time_unit(ctx: &mut Ctx, v: &Value, path: &str, hint: &str) -> Option<TimeUnit> {
    let names: Vec<&str> = TimeUnit::ALL.iter().map(|(_, s)| *s).collect();
    choice(ctx, v, path, &names, hint).and_then(TimeUnit::parse)
}

/// A string that must be one of `choices`; reports a suggestion when close to one.
pub(super) fn choice<'a>(
    ctx: &mut Ctx,
    v: &Value,
    path: &str,
    choices: &[&'a str],
    hint: &str,
) -> Option<&'a str> {
    let s = string(ctx, v, path, hint)?;
    if let Some(c) = choices.iter().find(|c| **c == s) {
        return Some(c);
    }
    let base = format!("unknown value `{s}`; use one of {}", quoted_list(choices));
    let message = match suggest(s, choices) {
        Some(c) => format!("{base} (did you mean `{c}`?)"),
        None => base,
    };
    ctx.push(path, message);
    None
}
