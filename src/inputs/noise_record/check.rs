//! The rules of a `quassay-noise` v1 record, checked by walking a [`serde_json::Value`] by hand.
//!
//! A derived `Deserialize` would stop at the first mistake and could not name every place; this
//! walker visits the whole record, collects every problem with its JSON pointer, and builds the
//! typed [`NoiseRecord`] only when there are none. Keys are checked against a fixed list for
//! every object: an unknown key is an error (a misspelt key must not silently drop a noise
//! source), with a suggestion when a known key is close. The order of problems is the order of
//! the walk (keys in the order of `FIELDS` tables, unknown keys alphabetically), so it is
//! deterministic.

use serde_json::{Map, Value};
use std::collections::BTreeMap;

use super::pointer::{child_index, child_key, suggest};
use crate::model::noise::{
    ActsOn, Amplitude, Calibration, Family, NoiseRecord, NoiseSource, Redrawn,
};
use crate::model::units::FrequencyUnit;
use crate::Problem;

/// The value of `format` in every noise record.
pub const FORMAT: &str = "quassay-noise";
/// The only `format_version` this reader understands.
pub const FORMAT_VERSION: u64 = 1;

/// One allowed key of an object: its name, whether it is required, and what it should hold.
struct Field {
    key: &'static str,
    required: bool,
    hint: &'static str,
}

const fn req(key: &'static str, hint: &'static str) -> Field {
    Field {
        key,
        required: true,
        hint,
    }
}

const fn opt(key: &'static str, hint: &'static str) -> Field {
    Field {
        key,
        required: false,
        hint,
    }
}

const TOP_FIELDS: &[Field] = &[
    req("format", "the string \"quassay-noise\""),
    req("format_version", "the integer 1"),
    req(
        "frequency_unit",
        "the unit of every amplitude, e.g. \"rad/us\" or \"MHz\"",
    ),
    req(
        "redrawn",
        "\"every_shot\", \"every_realization\" or \"once\"",
    ),
    req("sources", "an array with one object per noise source"),
    opt(
        "calibration",
        "an object with optional `method`, `date`, `notes`",
    ),
];

const SOURCE_FIELDS: &[Field] = &[
    req("name", "a short unique name, e.g. \"site detuning\""),
    req(
        "acts_on",
        "\"each_site\", \"each_bond\" or {\"sites\": [[0], [1, 2]]}",
    ),
    req(
        "operator_spectrum",
        "[min, max], the eigenvalue range of the operator (a Pauli: [-1, 1])",
    ),
    req(
        "amplitude",
        "a non-negative number in `frequency_unit`, or an array with one per instance",
    ),
    req(
        "distribution",
        "an object such as {\"family\": \"uniform\"}",
    ),
    opt("mean_offset", "a number, default 0"),
    opt(
        "mean_offset_uncertainty",
        "a non-negative number, default 0",
    ),
];

const SITES_FIELDS: &[Field] = &[req(
    "sites",
    "an array of supports, each a non-empty array of site indices",
)];

const CALIBRATION_FIELDS: &[Field] = &[
    opt("method", "free text"),
    opt("date", "free text, e.g. \"2026-11-30\""),
    opt("notes", "free text"),
];

/// The families and their parameters, in the order they are written.
const FAMILIES: &[(&str, &[&str])] = &[
    ("uniform", &[]),
    ("normal", &["sigma"]),
    ("truncated_normal", &["sigma", "cutoff"]),
    ("two_point", &[]),
    ("bounded", &["lower", "upper", "std", "symmetric"]),
];

/// Relative slack allowed above √(−lower·upper) for `std`, so that a value written as the
/// correctly rounded square root is accepted even when −lower·upper itself was rounded
/// (a few units in the last place; a larger declared std is only more conservative).
const STD_SLACK: f64 = 8.0 * f64::EPSILON;

/// Collected problems.
#[derive(Default)]
struct Ctx {
    problems: Vec<Problem>,
}

impl Ctx {
    fn push(&mut self, path: &str, message: impl Into<String>) {
        self.problems.push(Problem::new(path, message));
    }
}

/// Checks a whole record; paths are relative to `v` (its root is the empty pointer).
pub(crate) fn record(v: &Value) -> Result<NoiseRecord, Vec<Problem>> {
    let mut ctx = Ctx::default();
    let built = top(&mut ctx, v);
    match built {
        Some(r) if ctx.problems.is_empty() => Ok(r),
        _ if ctx.problems.is_empty() => Err(vec![Problem::new(
            "",
            "the record could not be read, but no rule named the reason (a quassay bug); \
             please report it with the file",
        )]),
        _ => Err(ctx.problems),
    }
}

/// What kind of JSON value `v` is, for messages.
fn kind(v: &Value) -> &'static str {
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
fn object<'a>(
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
fn unknown_keys(
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

fn quoted_list(items: &[&str]) -> String {
    items
        .iter()
        .map(|k| format!("`{k}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A string value, or a problem.
fn string<'a>(ctx: &mut Ctx, v: &'a Value, path: &str, hint: &str) -> Option<&'a str> {
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
fn number(ctx: &mut Ctx, v: &Value, path: &str, hint: &str) -> Option<f64> {
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
fn non_negative(ctx: &mut Ctx, v: &Value, path: &str, hint: &str) -> Option<f64> {
    let x = number(ctx, v, path, hint)?;
    if x < 0.0 {
        ctx.push(path, format!("must be ≥ 0, got {x} ({hint})"));
        return None;
    }
    Some(x)
}

/// A number `> 0`.
fn positive(ctx: &mut Ctx, v: &Value, path: &str, hint: &str) -> Option<f64> {
    let x = number(ctx, v, path, hint)?;
    if x <= 0.0 {
        ctx.push(path, format!("must be > 0, got {x} ({hint})"));
        return None;
    }
    Some(x)
}

/// A non-negative integer. As in JSON Schema, a number with zero fractional part counts
/// (`3.0` is 3), so the parser and `schemas/noise-record.schema.json` agree.
fn integer(v: &Value) -> Option<u64> {
    if let Some(u) = v.as_u64() {
        return Some(u);
    }
    match v.as_f64() {
        // 2^53: above it not every integer is representable, so refuse rather than guess.
        Some(x) if x >= 0.0 && x.fract() == 0.0 && x <= 9_007_199_254_740_992.0 => Some(x as u64),
        _ => None,
    }
}

/// A string that must be one of `choices`; reports a suggestion when close to one.
fn choice<'a>(
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

fn top(ctx: &mut Ctx, v: &Value) -> Option<NoiseRecord> {
    let map = object(ctx, v, "", "the noise record", TOP_FIELDS)?;
    let at = |k: &str| child_key("", k);

    if let Some(f) = map.get("format") {
        if let Some(s) = string(ctx, f, &at("format"), "\"quassay-noise\"") {
            if s != FORMAT {
                ctx.push(
                    &at("format"),
                    format!(
                        "is `{s}`, but a noise record says \"{FORMAT}\"; is this the right file?"
                    ),
                );
            }
        }
    }
    if let Some(f) = map.get("format_version") {
        match integer(f) {
            Some(FORMAT_VERSION) => {}
            Some(n) => ctx.push(
                &at("format_version"),
                format!(
                    "version {n} is not supported; this quassay reads version {FORMAT_VERSION}"
                ),
            ),
            None => ctx.push(
                &at("format_version"),
                format!("must be the integer {FORMAT_VERSION}, got {}", f),
            ),
        }
    }
    let unit = map
        .get("frequency_unit")
        .and_then(|u| frequency_unit(ctx, u, &at("frequency_unit")));
    let redrawn = map.get("redrawn").and_then(|r| {
        let names = ["every_shot", "every_realization", "once"];
        choice(
            ctx,
            r,
            &at("redrawn"),
            &names,
            "how often the noise is drawn again",
        )
        .and_then(Redrawn::parse)
    });
    let sources = map
        .get("sources")
        .and_then(|s| sources(ctx, s, &at("sources")));
    let calibration = match map.get("calibration") {
        None => Some(None),
        Some(c) => calibration(ctx, c, &at("calibration")).map(Some),
    };
    Some(NoiseRecord {
        frequency_unit: unit?,
        redrawn: redrawn?,
        sources: sources?,
        calibration: calibration?,
    })
}

fn frequency_unit(ctx: &mut Ctx, v: &Value, path: &str) -> Option<FrequencyUnit> {
    let s = string(
        ctx,
        v,
        path,
        "a frequency unit such as \"rad/us\" or \"MHz\"",
    )?;
    if let Some(u) = FrequencyUnit::parse(s) {
        return Some(u);
    }
    let spellings: Vec<&str> = FrequencyUnit::ALL.iter().map(|(_, s)| *s).collect();
    // "µ" (micro sign or Greek mu) is written "u" in files.
    let ascii = s.replace(['µ', 'μ'], "u");
    let hint = FrequencyUnit::parse(&ascii)
        .map(|u| u.as_str())
        .or_else(|| suggest(&ascii, &spellings));
    let mut message = format!(
        "unknown frequency unit `{s}`; use one of {} (case-sensitive; cyclic units are \
         multiplied by 2π)",
        FrequencyUnit::accepted()
    );
    if let Some(h) = hint {
        message.push_str(&format!("; did you mean `{h}`?"));
    }
    ctx.push(path, message);
    None
}

fn sources(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Vec<NoiseSource>> {
    let Value::Array(items) = v else {
        ctx.push(
            path,
            format!("must be an array of noise sources, got {}", kind(v)),
        );
        return None;
    };
    if items.is_empty() {
        ctx.push(
            path,
            "is empty; list at least one noise source (a record with none would describe a \
             noiseless device, which no lab has)",
        );
        return None;
    }
    let mut out = Vec::with_capacity(items.len());
    let mut all = true;
    let mut names: BTreeMap<&str, usize> = BTreeMap::new();
    for (i, item) in items.iter().enumerate() {
        let here = child_index(path, i);
        match source(ctx, item, &here) {
            Some(s) => out.push(s),
            None => all = false,
        }
        if let Some(Value::String(name)) = item.get("name") {
            if let Some(&first) = names.get(name.as_str()) {
                ctx.push(
                    &child_key(&here, "name"),
                    format!(
                        "repeats the name `{name}` of {}; give every source its own name",
                        child_index(path, first)
                    ),
                );
            } else {
                names.insert(name, i);
            }
        }
    }
    all.then_some(out)
}

fn source(ctx: &mut Ctx, v: &Value, path: &str) -> Option<NoiseSource> {
    let map = object(ctx, v, path, "a noise source", SOURCE_FIELDS)?;
    let at = |k: &str| child_key(path, k);

    let name = map.get("name").and_then(|n| {
        let s = string(ctx, n, &at("name"), "a short unique name")?;
        if s.trim().is_empty() {
            ctx.push(
                &at("name"),
                "is empty; give the source a name that says what it is, e.g. \"site detuning\"",
            );
            return None;
        }
        Some(s.to_string())
    });
    let acts_on = map
        .get("acts_on")
        .and_then(|a| acts_on(ctx, a, &at("acts_on")));
    let spectrum = map
        .get("operator_spectrum")
        .and_then(|s| operator_spectrum(ctx, s, &at("operator_spectrum")));
    let amplitude = map
        .get("amplitude")
        .and_then(|a| amplitude(ctx, a, &at("amplitude")));
    let family = map
        .get("distribution")
        .and_then(|d| distribution(ctx, d, &at("distribution")));
    let mean_offset = match map.get("mean_offset") {
        None => Some(0.0),
        Some(m) => number(
            ctx,
            m,
            &at("mean_offset"),
            "the known mean of the noise, in units of the amplitude",
        ),
    };
    let uncertainty = match map.get("mean_offset_uncertainty") {
        None => Some(0.0),
        Some(u) => non_negative(
            ctx,
            u,
            &at("mean_offset_uncertainty"),
            "the uncertainty of `mean_offset`, in units of the amplitude",
        ),
    };
    Some(NoiseSource {
        name: name?,
        acts_on: acts_on?,
        operator_spectrum: spectrum?,
        amplitude: amplitude?,
        family: family?,
        mean_offset: mean_offset?,
        mean_offset_uncertainty: uncertainty?,
    })
}

fn acts_on(ctx: &mut Ctx, v: &Value, path: &str) -> Option<ActsOn> {
    const WORDS: [&str; 2] = ["each_site", "each_bond"];
    match v {
        Value::String(_) => match choice(ctx, v, path, &WORDS, "where the source acts")? {
            "each_site" => Some(ActsOn::EachSite),
            _ => Some(ActsOn::EachBond),
        },
        Value::Object(_) => {
            let map = object(ctx, v, path, "{\"sites\": [...]}", SITES_FIELDS)?;
            let lists = map.get("sites")?;
            supports(ctx, lists, &child_key(path, "sites")).map(ActsOn::Sites)
        }
        other => {
            ctx.push(
                path,
                format!(
                    "must be \"each_site\", \"each_bond\" or {{\"sites\": [[0], [1, 2]]}}, got {}",
                    kind(other)
                ),
            );
            None
        }
    }
}

fn supports(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Vec<Vec<usize>>> {
    let Value::Array(lists) = v else {
        ctx.push(
            path,
            format!(
                "must be an array of supports, e.g. [[0], [1, 2]], got {}",
                kind(v)
            ),
        );
        return None;
    };
    if lists.is_empty() {
        ctx.push(
            path,
            "is empty; list the sites of at least one instance, e.g. [[0], [1, 2]]",
        );
        return None;
    }
    let mut out = Vec::with_capacity(lists.len());
    let mut all = true;
    for (j, list) in lists.iter().enumerate() {
        match support(ctx, list, &child_index(path, j)) {
            Some(s) => out.push(s),
            None => all = false,
        }
    }
    all.then_some(out)
}

fn support(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Vec<usize>> {
    let Value::Array(sites) = v else {
        ctx.push(
            path,
            format!(
                "must be an array of site indices, e.g. [1, 2], got {}",
                kind(v)
            ),
        );
        return None;
    };
    if sites.is_empty() {
        ctx.push(
            path,
            "is empty; an instance acts on at least one site (remove the empty list)",
        );
        return None;
    }
    let mut out = Vec::with_capacity(sites.len());
    let mut all = true;
    for (k, s) in sites.iter().enumerate() {
        let here = child_index(path, k);
        match integer(s).and_then(|u| usize::try_from(u).ok()) {
            Some(site) if out.contains(&site) => {
                ctx.push(
                    &here,
                    format!("repeats site {site} in this support; list every site once"),
                );
                all = false;
            }
            Some(site) => out.push(site),
            None => {
                ctx.push(
                    &here,
                    format!("must be a non-negative integer (a 0-based site index), got {s}"),
                );
                all = false;
            }
        }
    }
    all.then_some(out)
}

fn operator_spectrum(ctx: &mut Ctx, v: &Value, path: &str) -> Option<[f64; 2]> {
    let hint = "[min, max], the lowest and highest eigenvalue of the operator the source \
                multiplies (a Pauli: [-1, 1]; a projector: [0, 1])";
    let pair = match v {
        Value::Array(a) if a.len() == 2 => a,
        Value::Array(a) => {
            ctx.push(path, format!("has {} entries; it must be {hint}", a.len()));
            return None;
        }
        other => {
            ctx.push(path, format!("must be {hint}, got {}", kind(other)));
            return None;
        }
    };
    let lo = number(
        ctx,
        &pair[0],
        &child_index(path, 0),
        "the lowest eigenvalue",
    );
    let hi = number(
        ctx,
        &pair[1],
        &child_index(path, 1),
        "the highest eigenvalue",
    );
    let (lo, hi) = (lo?, hi?);
    if lo == hi {
        ctx.push(
            path,
            format!(
                "has zero spread ([{lo}, {hi}]): such a source only shifts the energy by a \
                 constant and changes nothing; give the operator's real eigenvalue range or \
                 remove the source"
            ),
        );
        return None;
    }
    if lo > hi {
        ctx.push(
            path,
            format!("is reversed ([{lo}, {hi}]); write [min, max], here [{hi}, {lo}]"),
        );
        return None;
    }
    Some([lo, hi])
}

fn amplitude(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Amplitude> {
    let hint = "the size of the noise in the record's `frequency_unit`; describe a one-sided \
                law with the `bounded` family and a known mean with `mean_offset`";
    match v {
        Value::Array(items) => {
            if items.is_empty() {
                ctx.push(
                    path,
                    "is an empty array; give one value per instance, or a single number",
                );
                return None;
            }
            let mut out = Vec::with_capacity(items.len());
            let mut all = true;
            for (k, x) in items.iter().enumerate() {
                match non_negative(ctx, x, &child_index(path, k), hint) {
                    Some(a) => out.push(a),
                    None => all = false,
                }
            }
            all.then_some(Amplitude::PerInstance(out))
        }
        other => non_negative(ctx, other, path, hint).map(Amplitude::Scalar),
    }
}

fn distribution(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Family> {
    let Value::Object(map) = v else {
        ctx.push(
            path,
            format!(
                "must be an object such as {{\"family\": \"uniform\"}}, got {}",
                kind(v)
            ),
        );
        return None;
    };
    let names: Vec<&str> = FAMILIES.iter().map(|(n, _)| *n).collect();
    let Some(fam) = map.get("family") else {
        ctx.push(
            path,
            format!(
                "the required key `family` is missing; add one of {}",
                quoted_list(&names)
            ),
        );
        // Still report keys that no family has.
        let mut every: Vec<&str> = vec!["family"];
        FAMILIES
            .iter()
            .for_each(|(_, p)| every.extend_from_slice(p));
        unknown_keys(ctx, map, path, &every, |_| None);
        return None;
    };
    let family = choice(
        ctx,
        fam,
        &child_key(path, "family"),
        &names,
        "the distribution family",
    )?;
    let params: &[&str] = FAMILIES
        .iter()
        .find(|(n, _)| *n == family)
        .map(|(_, p)| *p)
        .unwrap_or(&[]);
    let mut known = vec!["family"];
    known.extend_from_slice(params);
    unknown_keys(ctx, map, path, &known, |key| {
        let owners: Vec<&str> = FAMILIES
            .iter()
            .filter(|(_, p)| p.contains(&key))
            .map(|(n, _)| *n)
            .collect();
        (!owners.is_empty()).then(|| {
            let has = if params.is_empty() {
                "none".to_string()
            } else {
                quoted_list(params)
            };
            format!(
                "`{key}` is not a parameter of the `{family}` family (its parameters: {has}); \
                 remove it, or choose a family that has it ({})",
                quoted_list(&owners)
            )
        })
    });
    for p in params.iter().filter(|p| !map.contains_key(**p)) {
        ctx.push(
            path,
            format!("the `{family}` family needs the parameter `{p}`; add it"),
        );
    }
    let at = |k: &str| child_key(path, k);
    let get = |k: &str| map.get(k);
    match family {
        "uniform" => Some(Family::Uniform),
        "two_point" => Some(Family::TwoPoint),
        "normal" => {
            let sigma = get("sigma").and_then(|s| {
                positive(
                    ctx,
                    s,
                    &at("sigma"),
                    "the standard deviation, in units of the amplitude",
                )
            });
            Some(Family::Normal { sigma: sigma? })
        }
        "truncated_normal" => {
            let sigma = get("sigma").and_then(|s| {
                positive(
                    ctx,
                    s,
                    &at("sigma"),
                    "the normal law's parameter σ before truncation",
                )
            });
            let cutoff = get("cutoff").and_then(|c| {
                positive(
                    ctx,
                    c,
                    &at("cutoff"),
                    "the law is restricted to [-cutoff, cutoff]",
                )
            });
            Some(Family::TruncatedNormal {
                sigma: sigma?,
                cutoff: cutoff?,
            })
        }
        _ => bounded(ctx, map, path),
    }
}

fn bounded(ctx: &mut Ctx, map: &Map<String, Value>, path: &str) -> Option<Family> {
    let at = |k: &str| child_key(path, k);
    let mean_zero = "every family has zero mean, so a law on [lower, upper] needs lower ≤ 0 ≤ \
                     upper; put a known offset into `mean_offset`";
    let lower = map.get("lower").and_then(|l| {
        let x = number(ctx, l, &at("lower"), "the lowest value g can take")?;
        if x > 0.0 {
            ctx.push(&at("lower"), format!("must be ≤ 0, got {x}: {mean_zero}"));
            return None;
        }
        Some(x)
    });
    let upper = map.get("upper").and_then(|u| {
        let x = number(ctx, u, &at("upper"), "the highest value g can take")?;
        if x < 0.0 {
            ctx.push(&at("upper"), format!("must be ≥ 0, got {x}: {mean_zero}"));
            return None;
        }
        Some(x)
    });
    let std = map.get("std").and_then(|s| {
        non_negative(
            ctx,
            s,
            &at("std"),
            "an upper bound on the standard deviation of g",
        )
    });
    let symmetric = map.get("symmetric").and_then(|s| match s {
        Value::Bool(b) => Some(*b),
        other => {
            ctx.push(
                &at("symmetric"),
                format!(
                    "must be true or false (whether the law is symmetric about 0), got {}",
                    kind(other)
                ),
            );
            None
        }
    });
    if let (Some(l), Some(u)) = (lower, upper) {
        if l == u {
            ctx.push(
                path,
                "has lower = upper = 0: that law is the constant 0, so the source adds no \
                 noise; widen [lower, upper] or remove the source",
            );
            return None;
        }
        // Bhatia–Davis: a law on [l, u] with mean 0 has variance ≤ (u − 0)(0 − l) = −l·u.
        let max_std = (-l * u).sqrt();
        if let Some(s) = std {
            if s > max_std * (1.0 + STD_SLACK) {
                ctx.push(
                    &at("std"),
                    format!(
                        "is {s}, but a zero-mean law on [{l}, {u}] has standard deviation at \
                         most √(−lower·upper) = {max_std} (Bhatia–Davis inequality); lower \
                         `std` or widen the bounds"
                    ),
                );
            }
        }
        if symmetric == Some(true) && l != -u {
            ctx.push(
                &at("symmetric"),
                format!(
                    "is true, but [{l}, {u}] is not symmetric about 0; a symmetric law needs \
                     lower = −upper: set `symmetric` to false or make the bounds symmetric"
                ),
            );
            return None;
        }
    }
    let std = std.filter(|&s| {
        lower
            .zip(upper)
            .is_none_or(|(l, u)| s <= (-l * u).sqrt() * (1.0 + STD_SLACK))
    });
    Some(Family::Bounded {
        lower: lower?,
        upper: upper?,
        std: std?,
        symmetric: symmetric?,
    })
}

fn calibration(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Calibration> {
    let map = object(
        ctx,
        v,
        path,
        "an object with optional `method`, `date`, `notes`",
        CALIBRATION_FIELDS,
    )?;
    let mut text = |k: &str| match map.get(k) {
        None => Some(None),
        Some(x) => string(ctx, x, &child_key(path, k), "free text").map(|s| Some(s.to_string())),
    };
    let method = text("method");
    let date = text("date");
    let notes = text("notes");
    Some(Calibration {
        method: method?,
        date: date?,
        notes: notes?,
    })
}
