//! The rules of a `quassay-noise` record (versions 1, 2 and 3), checked by walking a [`serde_json::Value`] by hand.
//!
//! A derived `Deserialize` would stop at the first mistake and could not name every place; this
//! walker visits the whole record, collects every problem with its JSON pointer, and builds the
//! typed [`NoiseRecord`] only when there are none. Keys are checked against a fixed list for
//! every object: an unknown key is an error (a misspelt key must not silently drop a noise
//! source), with a suggestion when a known key is close. The order of problems is the order of
//! the walk (keys in the order of `FIELDS` tables, unknown keys alphabetically), so it is
//! deterministic.
//!
//! The files: this one holds the key tables, the walk's context and the top level; `values` the
//! typed getters that record a problem (strings, numbers, choices, objects with their keys);
//! `source` a noise source (where it acts, its spectrum and amplitude); `distribution` the
//! family and its parameters; `device` the device sections of version 2 (incoherent,
//! preparation and readout errors).

mod device;
mod distribution;
mod source;
mod values;

use serde_json::Value;
use source::sources;
use values::{choice, integer, object, string};

use super::pointer::{child_key, suggest};
use crate::model::noise::{Calibration, NoiseRecord, Redrawn};
use crate::model::units::FrequencyUnit;
use crate::Problem;

/// The value of `format` in every noise record.
pub const FORMAT: &str = "quassay-noise";
/// The `format_version` of records without device sections (what the writer produces).
pub const FORMAT_VERSION: u64 = 1;
/// The `format_version` that allows the device sections `incoherent`, `preparation` and
/// `readout` (docs/noise-record.md, "Version 2"); version 1 records read as before.
pub const FORMAT_VERSION_DEVICE: u64 = 2;
/// The `format_version` that also allows a source's `correlation_time` (docs/noise-record.md,
/// "Version 3"); versions 1 and 2 read as before.
pub const FORMAT_VERSION_WINDOWS: u64 = 3;
/// The top-level keys of versions 2 and 3 only.
const DEVICE_KEYS: [&str; 3] = ["incoherent", "preparation", "readout"];

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
    req(
        "format_version",
        "the integer 1; 2 for a record with device sections; 3 for one with correlation times",
    ),
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
    opt(
        "incoherent",
        "(version 2) an array of incoherent channels: jumps with rates, or T1 and T2",
    ),
    opt(
        "preparation",
        "(version 2) an array of preparation entries with trace distances",
    ),
    opt(
        "readout",
        "(version 2) an object with `applies_to` and an array of readout `errors`",
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
    opt(
        "correlation_time",
        "(version 3) {\"value\": τ, \"unit\": \"us\"}: the noise is redrawn every τ during an \
         evolution",
    ),
];

const CORRELATION_FIELDS: &[Field] = &[
    req("value", "the correlation time τ, a positive number"),
    req("unit", "the unit of τ: \"s\", \"ms\", \"us\" or \"ns\""),
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
    /// The record's `format_version`, once read (the source rules depend on it).
    version: Option<u64>,
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
    let mut version = None;
    if let Some(f) = map.get("format_version") {
        match integer(f) {
            Some(n @ (FORMAT_VERSION | FORMAT_VERSION_DEVICE | FORMAT_VERSION_WINDOWS)) => {
                version = Some(n)
            }
            Some(n) => ctx.push(
                &at("format_version"),
                format!(
                    "version {n} is not supported; this quassay reads versions {FORMAT_VERSION}, \
                     {FORMAT_VERSION_DEVICE} and {FORMAT_VERSION_WINDOWS}"
                ),
            ),
            None => ctx.push(
                &at("format_version"),
                format!(
                    "must be the integer {FORMAT_VERSION}, {FORMAT_VERSION_DEVICE} or \
                     {FORMAT_VERSION_WINDOWS}, got {}",
                    f
                ),
            ),
        }
    }
    if version == Some(FORMAT_VERSION) {
        for key in DEVICE_KEYS.iter().filter(|k| map.contains_key(**k)) {
            ctx.push(
                &at(key),
                format!(
                    "is a section of format version {FORMAT_VERSION_DEVICE}; set \
                     `format_version` to {FORMAT_VERSION_DEVICE} (a version {FORMAT_VERSION} \
                     record has no device sections)"
                ),
            );
        }
    }
    ctx.version = version;
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
    let device = if version == Some(FORMAT_VERSION) {
        Some(Default::default())
    } else {
        device::device(ctx, map)
    };
    Some(NoiseRecord {
        frequency_unit: unit?,
        redrawn: redrawn?,
        sources: sources?,
        calibration: calibration?,
        format_version: version?,
        device: device?,
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
