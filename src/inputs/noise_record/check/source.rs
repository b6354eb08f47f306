//! A noise source of the record: its keys, where it acts (`each_site`, `each_bond` or listed
//! supports), its operator spectrum and its amplitude (docs/noise-record.md, "A source").

use serde_json::Value;
use std::collections::BTreeMap;

use crate::inputs::noise_record::pointer::{child_index, child_key};
use crate::model::noise::{ActsOn, Amplitude, NoiseSource};

use super::distribution::distribution;
use super::values::{
    choice, integer, kind, non_negative, number, object, positive, string, time_unit,
};
use super::*;
use crate::model::units::TimeUnit;

pub(super) fn sources(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Vec<NoiseSource>> {
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
    let correlation_time = match map.get("correlation_time") {
        None => Some(None),
        Some(c) => correlation_time(ctx, c, &at("correlation_time")).map(Some),
    };
    Some(NoiseSource {
        correlation_time: correlation_time?,
        name: name?,
        acts_on: acts_on?,
        operator_spectrum: spectrum?,
        amplitude: amplitude?,
        family: family?,
        mean_offset: mean_offset?,
        mean_offset_uncertainty: uncertainty?,
    })
}

/// `{"value": τ, "unit": "us"}`, allowed from format version 3 on.
fn correlation_time(ctx: &mut Ctx, v: &Value, path: &str) -> Option<(f64, TimeUnit)> {
    if let Some(n) = ctx.version.filter(|&n| n < FORMAT_VERSION_WINDOWS) {
        ctx.push(
            path,
            format!(
                "is a key of format version {FORMAT_VERSION_WINDOWS}; set `format_version` to \
                 {FORMAT_VERSION_WINDOWS} (a version {n} record describes noise that is \
                 constant during each evolution)"
            ),
        );
        return None;
    }
    let map = object(
        ctx,
        v,
        path,
        "an object {\"value\": τ, \"unit\": \"us\"}",
        CORRELATION_FIELDS,
    )?;
    let value = map.get("value").and_then(|x| {
        positive(
            ctx,
            x,
            &child_key(path, "value"),
            "the correlation time τ, a positive number",
        )
    });
    let unit = map.get("unit").and_then(|u| {
        time_unit(
            ctx,
            u,
            &child_key(path, "unit"),
            "the unit of the correlation time",
        )
    });
    Some((value?, unit?))
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
