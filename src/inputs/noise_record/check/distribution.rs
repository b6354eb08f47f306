//! The distribution of a source: the family and exactly its parameters, with the bounded
//! family's checks (zero mean possible, Bhatia–Davis, symmetry) (docs/noise-record.md, "The
//! distribution").

use serde_json::{Map, Value};

use crate::inputs::noise_record::pointer::child_key;
use crate::model::noise::Family;

use super::values::{choice, kind, non_negative, number, positive, quoted_list, unknown_keys};
use super::*;

pub(super) fn distribution(ctx: &mut Ctx, v: &Value, path: &str) -> Option<Family> {
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
