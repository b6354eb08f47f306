//! The device sections of a version 2 record: `incoherent`, `preparation` and `readout`
//! (docs/noise-record.md, "Version 2"). Every value comes with the upper bound of its
//! uncertainty and an explicit unit; nothing is optional that the bounds would otherwise have
//! to guess.

use serde_json::Value;

use crate::inputs::noise_record::pointer::{child_index, child_key};
use crate::model::device::{
    AppliesTo, Channel, ChannelSpec, DeviceRecord, Jump, Preparation, RateUnit, Readout,
    ReadoutEntry, SiteSet,
};

use super::values::{choice, integer, kind, non_negative, object, positive, string, time_unit};
use super::*;

const CHANNEL_FIELDS: &[Field] = &[
    req("name", "a short unique name, e.g. \"T1 and T2\""),
    req("acts_on", "\"each_site\" or {\"sites\": [0, 3]}"),
    opt(
        "jump",
        "\"dephasing\", \"decay\", \"excitation\" or \"depolarising\"",
    ),
    opt(
        "rate",
        "the rate γ of the jump, a number ≥ 0 in `rate_unit`",
    ),
    opt(
        "rate_uncertainty",
        "an upper bound of the rate's uncertainty, ≥ 0",
    ),
    opt("rate_unit", "\"1/s\", \"1/ms\", \"1/us\" or \"1/ns\""),
    opt("t1", "the relaxation time T1 in `time_unit`"),
    opt(
        "t1_uncertainty",
        "an upper bound of T1's uncertainty, ≥ 0 and below T1",
    ),
    opt("t2", "the coherence time T2 in `time_unit` (at most 2·T1)"),
    opt(
        "t2_uncertainty",
        "an upper bound of T2's uncertainty, ≥ 0 and below T2",
    ),
    opt("time_unit", "\"s\", \"ms\", \"us\" or \"ns\""),
];
const RATE_KEYS: [&str; 4] = ["jump", "rate", "rate_uncertainty", "rate_unit"];
const TIME_KEYS: [&str; 5] = ["t1", "t1_uncertainty", "t2", "t2_uncertainty", "time_unit"];

const PREPARATION_FIELDS: &[Field] = &[
    req("acts_on", "\"each_site\" or {\"sites\": [0, 3]}"),
    req(
        "trace_distance",
        "the trace distance of each site's prepared state from the intended one, in [0, 1]",
    ),
    req(
        "trace_distance_uncertainty",
        "an upper bound of its uncertainty, ≥ 0",
    ),
];

const READOUT_FIELDS: &[Field] = &[
    req(
        "applies_to",
        "\"all\" or the names of the observables read in the computational basis",
    ),
    req(
        "errors",
        "an array of {acts_on, flip_0_to_1, flip_1_to_0, flip_uncertainty}",
    ),
];

const READOUT_ERROR_FIELDS: &[Field] = &[
    req("acts_on", "\"each_site\" or {\"sites\": [0, 3]}"),
    req(
        "flip_0_to_1",
        "the probability of reading 1 for 0, in [0, 1]",
    ),
    req(
        "flip_1_to_0",
        "the probability of reading 0 for 1, in [0, 1]",
    ),
    req(
        "flip_uncertainty",
        "an upper bound of both probabilities' uncertainty, ≥ 0",
    ),
];

const SITE_LIST_FIELDS: &[Field] = &[req("sites", "an array of 0-based site indices")];

/// The device sections of the top-level object `map` (absent sections stay `None`).
pub(super) fn device(ctx: &mut Ctx, map: &serde_json::Map<String, Value>) -> Option<DeviceRecord> {
    let incoherent = match map.get("incoherent") {
        None => Some(None),
        Some(v) => channels(ctx, v, "/incoherent").map(Some),
    };
    let preparation = match map.get("preparation") {
        None => Some(None),
        Some(v) => list(
            ctx,
            v,
            "/preparation",
            "preparation entries",
            preparation_entry,
        )
        .map(Some),
    };
    let readout = match map.get("readout") {
        None => Some(None),
        Some(v) => readout(ctx, v, "/readout").map(Some),
    };
    Some(DeviceRecord {
        incoherent: incoherent?,
        preparation: preparation?,
        readout: readout?,
    })
}

/// A non-empty array, each item read by `item`.
fn list<T>(
    ctx: &mut Ctx,
    v: &Value,
    path: &str,
    what: &str,
    item: fn(&mut Ctx, &Value, &str) -> Option<T>,
) -> Option<Vec<T>> {
    let Value::Array(items) = v else {
        ctx.push(path, format!("must be an array of {what}, got {}", kind(v)));
        return None;
    };
    if items.is_empty() {
        ctx.push(
            path,
            format!("is empty; list at least one of the {what}, or leave the key out"),
        );
        return None;
    }
    let mut out = Vec::with_capacity(items.len());
    let mut all = true;
    for (i, x) in items.iter().enumerate() {
        match item(ctx, x, &child_index(path, i)) {
            Some(t) => out.push(t),
            None => all = false,
        }
    }
    all.then_some(out)
}

fn channels(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Vec<Channel>> {
    let out = list(ctx, v, path, "incoherent channels", channel)?;
    let mut all = true;
    for (i, c) in out.iter().enumerate() {
        if let Some(first) = out[..i].iter().position(|d| d.name == c.name) {
            ctx.push(
                &child_key(&child_index(path, i), "name"),
                format!(
                    "repeats the name `{}` of {}; give every channel its own name",
                    c.name,
                    child_index(path, first)
                ),
            );
            all = false;
        }
    }
    all.then_some(out)
}

fn channel(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Channel> {
    let map = object(ctx, v, path, "an incoherent channel", CHANNEL_FIELDS)?;
    let at = |k: &str| child_key(path, k);
    let name = map.get("name").and_then(|n| {
        let s = string(ctx, n, &at("name"), "a short unique name")?;
        if s.trim().is_empty() {
            ctx.push(&at("name"), "is empty; give the channel a name");
            return None;
        }
        Some(s.to_string())
    });
    let acts_on = map
        .get("acts_on")
        .and_then(|a| site_set(ctx, a, &at("acts_on")));
    let has_rate = RATE_KEYS.iter().any(|k| map.contains_key(*k));
    let has_times = TIME_KEYS.iter().any(|k| map.contains_key(*k));
    let spec = match (has_rate, has_times) {
        (true, true) => {
            ctx.push(
                path,
                "mixes a jump with its rate and T1/T2 times; give either `jump`, `rate`, \
                 `rate_uncertainty`, `rate_unit` or `t1`, `t1_uncertainty`, `t2`, \
                 `t2_uncertainty`, `time_unit`, in separate channels",
            );
            None
        }
        (false, false) => {
            ctx.push(
                path,
                "says neither a jump with its rate nor T1 and T2; add `jump`, `rate`, \
                 `rate_uncertainty`, `rate_unit`, or `t1`, `t1_uncertainty`, `t2`, \
                 `t2_uncertainty`, `time_unit`",
            );
            None
        }
        (true, false) => rate_spec(ctx, map, path),
        (false, true) => times_spec(ctx, map, path),
    };
    Some(Channel {
        name: name?,
        acts_on: acts_on?,
        spec: spec?,
    })
}

/// The value of a key that the chosen form requires, or a problem naming it.
fn required<'a>(
    ctx: &mut Ctx,
    map: &'a serde_json::Map<String, Value>,
    path: &str,
    key: &str,
    hint: &str,
) -> Option<&'a Value> {
    let v = map.get(key);
    if v.is_none() {
        ctx.push(
            path,
            format!("the required key `{key}` is missing; add it: {hint} (an unknown value is never taken as 0)"),
        );
    }
    v
}

fn rate_spec(
    ctx: &mut Ctx,
    map: &serde_json::Map<String, Value>,
    path: &str,
) -> Option<ChannelSpec> {
    let at = |k: &str| child_key(path, k);
    let names: Vec<&str> = Jump::ALL.iter().map(|(_, s)| *s).collect();
    let jump = required(
        ctx,
        map,
        path,
        "jump",
        "one of \"dephasing\", \"decay\", \"excitation\", \"depolarising\"",
    )
    .and_then(|j| choice(ctx, j, &at("jump"), &names, "the jump operator"))
    .and_then(Jump::parse);
    let rate = required(ctx, map, path, "rate", "the rate γ, ≥ 0")
        .and_then(|r| non_negative(ctx, r, &at("rate"), "the rate γ of the jump"));
    let unc = required(
        ctx,
        map,
        path,
        "rate_uncertainty",
        "an upper bound of the rate's uncertainty",
    )
    .and_then(|r| non_negative(ctx, r, &at("rate_uncertainty"), "the rate's uncertainty"));
    let unit = required(
        ctx,
        map,
        path,
        "rate_unit",
        "\"1/s\", \"1/ms\", \"1/us\" or \"1/ns\"",
    )
    .and_then(|u| rate_unit(ctx, u, &at("rate_unit")));
    Some(ChannelSpec::Rate {
        jump: jump?,
        rate: rate?,
        uncertainty: unc?,
        unit: unit?,
    })
}

fn times_spec(
    ctx: &mut Ctx,
    map: &serde_json::Map<String, Value>,
    path: &str,
) -> Option<ChannelSpec> {
    let at = |k: &str| child_key(path, k);
    let time = |ctx: &mut Ctx, key: &str, hint: &str| {
        required(ctx, map, path, key, hint).and_then(|v| positive(ctx, v, &at(key), hint))
    };
    let t1 = time(ctx, "t1", "the relaxation time T1, > 0");
    let t2 = time(ctx, "t2", "the coherence time T2, > 0");
    let u1 = required(
        ctx,
        map,
        path,
        "t1_uncertainty",
        "an upper bound of T1's uncertainty",
    )
    .and_then(|v| non_negative(ctx, v, &at("t1_uncertainty"), "T1's uncertainty"));
    let u2 = required(
        ctx,
        map,
        path,
        "t2_uncertainty",
        "an upper bound of T2's uncertainty",
    )
    .and_then(|v| non_negative(ctx, v, &at("t2_uncertainty"), "T2's uncertainty"));
    let unit = required(
        ctx,
        map,
        path,
        "time_unit",
        "\"s\", \"ms\", \"us\" or \"ns\"",
    )
    .and_then(|u| time_unit(ctx, u, &at("time_unit"), "a time unit"));
    let (t1, t2, u1, u2, unit) = (t1?, t2?, u1?, u2?, unit?);
    let mut ok = true;
    if u1 >= t1 {
        ctx.push(
            &at("t1_uncertainty"),
            format!("is {u1}, not below T1 = {t1}: the relaxation rate would have no upper bound"),
        );
        ok = false;
    }
    if u2 >= t2 {
        ctx.push(
            &at("t2_uncertainty"),
            format!("is {u2}, not below T2 = {t2}: the dephasing rate would have no upper bound"),
        );
        ok = false;
    }
    if t2 > 2.0 * t1 {
        ctx.push(
            &at("t2"),
            format!(
                "is {t2}, more than 2·T1 = {}: no Markovian qubit has T2 > 2·T1; check the values \
                 and whether T2 is the Ramsey (T2*) or echo time",
                2.0 * t1
            ),
        );
        ok = false;
    }
    ok.then_some(ChannelSpec::Times {
        t1,
        t1_uncertainty: u1,
        t2,
        t2_uncertainty: u2,
        unit,
    })
}

fn rate_unit(ctx: &mut Ctx, v: &Value, path: &str) -> Option<RateUnit> {
    let names: Vec<&str> = RateUnit::ALL.iter().map(|(_, s)| *s).collect();
    choice(ctx, v, path, &names, "a rate unit").and_then(RateUnit::parse)
}

fn site_set(ctx: &mut Ctx, v: &Value, path: &str) -> Option<SiteSet> {
    match v {
        Value::String(_) => {
            choice(ctx, v, path, &["each_site"], "where the entry acts").map(|_| SiteSet::EachSite)
        }
        Value::Object(_) => {
            let map = object(ctx, v, path, "{\"sites\": [...]}", SITE_LIST_FIELDS)?;
            let sites = map.get("sites")?;
            let here = child_key(path, "sites");
            let Value::Array(items) = sites else {
                ctx.push(
                    &here,
                    format!(
                        "must be an array of site indices, e.g. [0, 3], got {}",
                        kind(sites)
                    ),
                );
                return None;
            };
            if items.is_empty() {
                ctx.push(&here, "is empty; list at least one site, e.g. [0, 3]");
                return None;
            }
            let mut out: Vec<usize> = Vec::with_capacity(items.len());
            let mut all = true;
            for (k, s) in items.iter().enumerate() {
                match integer(s).and_then(|u| usize::try_from(u).ok()) {
                    Some(site) if out.contains(&site) => {
                        ctx.push(
                            &child_index(&here, k),
                            format!("repeats site {site}; list every site once"),
                        );
                        all = false;
                    }
                    Some(site) => out.push(site),
                    None => {
                        ctx.push(
                            &child_index(&here, k),
                            format!(
                                "must be a non-negative integer (a 0-based site index), got {s}"
                            ),
                        );
                        all = false;
                    }
                }
            }
            all.then_some(SiteSet::Sites(out))
        }
        other => {
            ctx.push(
                path,
                format!(
                    "must be \"each_site\" or {{\"sites\": [0, 3]}}, got {}",
                    kind(other)
                ),
            );
            None
        }
    }
}

/// A probability in [0, 1].
fn probability(ctx: &mut Ctx, v: &Value, path: &str, hint: &str) -> Option<f64> {
    let x = non_negative(ctx, v, path, hint)?;
    if x > 1.0 {
        ctx.push(
            path,
            format!("is {x}, but a probability lies in [0, 1] ({hint})"),
        );
        return None;
    }
    Some(x)
}

fn preparation_entry(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Preparation> {
    let map = object(ctx, v, path, "a preparation entry", PREPARATION_FIELDS)?;
    let at = |k: &str| child_key(path, k);
    let acts_on = map
        .get("acts_on")
        .and_then(|a| site_set(ctx, a, &at("acts_on")));
    let d = map.get("trace_distance").and_then(|x| {
        probability(
            ctx,
            x,
            &at("trace_distance"),
            "a trace distance between two states",
        )
    });
    let u = map.get("trace_distance_uncertainty").and_then(|x| {
        non_negative(
            ctx,
            x,
            &at("trace_distance_uncertainty"),
            "the trace distance's uncertainty",
        )
    });
    Some(Preparation {
        acts_on: acts_on?,
        trace_distance: d?,
        uncertainty: u?,
    })
}

fn readout(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Readout> {
    let map = object(ctx, v, path, "the readout section", READOUT_FIELDS)?;
    let at = |k: &str| child_key(path, k);
    let applies_to = map
        .get("applies_to")
        .and_then(|a| applies_to(ctx, a, &at("applies_to")));
    let entries = map.get("errors").and_then(|e| {
        list(
            ctx,
            e,
            &at("errors"),
            "readout error entries",
            readout_entry,
        )
    });
    Some(Readout {
        applies_to: applies_to?,
        entries: entries?,
    })
}

fn applies_to(ctx: &mut Ctx, v: &Value, path: &str) -> Option<AppliesTo> {
    match v {
        Value::String(_) => {
            choice(ctx, v, path, &["all"], "\"all\" or a list of names").map(|_| AppliesTo::All)
        }
        Value::Array(items) => {
            if items.is_empty() {
                ctx.push(
                    path,
                    "is empty; name the observables read in the computational basis, or \"all\"",
                );
                return None;
            }
            let mut out: Vec<String> = Vec::with_capacity(items.len());
            let mut all = true;
            for (k, x) in items.iter().enumerate() {
                match string(ctx, x, &child_index(path, k), "an observable's name") {
                    Some(s) if out.iter().any(|o| o == s) => {
                        ctx.push(
                            &child_index(path, k),
                            format!("repeats `{s}`; name it once"),
                        );
                        all = false;
                    }
                    Some(s) => out.push(s.to_string()),
                    None => all = false,
                }
            }
            all.then_some(AppliesTo::Names(out))
        }
        other => {
            ctx.push(
                path,
                format!(
                    "must be \"all\" or an array of observable names, got {}",
                    kind(other)
                ),
            );
            None
        }
    }
}

fn readout_entry(ctx: &mut Ctx, v: &Value, path: &str) -> Option<ReadoutEntry> {
    let map = object(ctx, v, path, "a readout error entry", READOUT_ERROR_FIELDS)?;
    let at = |k: &str| child_key(path, k);
    let acts_on = map
        .get("acts_on")
        .and_then(|a| site_set(ctx, a, &at("acts_on")));
    let p01 = map
        .get("flip_0_to_1")
        .and_then(|x| probability(ctx, x, &at("flip_0_to_1"), "P(read 1 | 0)"));
    let p10 = map
        .get("flip_1_to_0")
        .and_then(|x| probability(ctx, x, &at("flip_1_to_0"), "P(read 0 | 1)"));
    let u = map.get("flip_uncertainty").and_then(|x| {
        non_negative(
            ctx,
            x,
            &at("flip_uncertainty"),
            "the flip probabilities' uncertainty",
        )
    });
    Some(ReadoutEntry {
        acts_on: acts_on?,
        flip_0_to_1: p01?,
        flip_1_to_0: p10?,
        uncertainty: u?,
    })
}
