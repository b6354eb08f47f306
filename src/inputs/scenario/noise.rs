//! The noise of a scenario: the declared record (checked by the noise-record reader once the
//! `operator` keys are taken out) and the optional true noise the simulator draws from
//! (docs/scenario.md, "Noise" and "True noise").

use serde_json::Value;

use crate::inputs::noise_record::noise_record_from_value;
use crate::model::noise::Amplitude;
use crate::model::{ActsOn, Lattice, NoiseRecord};

use super::*;
use crate::inputs::json_reader::{prefix, Reader};

/// The declared noise: operators taken out, spectra filled in, then the record reader.
pub(super) fn noise(rd: &mut Reader, v: &Value) -> Option<(NoiseRecord, Vec<NoiseOperator>)> {
    let (body, ops) = split_operators(rd, v, "/noise", "/sources")?;
    match noise_record_from_value(&body) {
        Ok(rec) => Some((rec, ops?)),
        Err(ps) => {
            rd.problems.extend(prefix(ps, "/noise"));
            None
        }
    }
}

/// Takes the `operator` out of every source of `v[sources_key]` and inserts its spectrum.
/// `path` is the pointer of `v`. Returns the new value and the operators (if all are valid).
fn split_operators(
    rd: &mut Reader,
    v: &Value,
    path: &str,
    sources_key: &str,
) -> Option<(Value, Option<Vec<NoiseOperator>>)> {
    let mut body = v.clone();
    let Some(sources) = body.pointer_mut(sources_key).and_then(Value::as_array_mut) else {
        if !v.is_object() {
            rd.push(
                path,
                "must be a JSON object (a quassay-noise record with an operator per source)",
            );
            return None;
        }
        // Let the record reader say what is missing.
        return Some((body, None));
    };
    let mut ops = Some(Vec::new());
    for (i, s) in sources.iter_mut().enumerate() {
        let sp = format!("{path}{sources_key}/{i}");
        let Some(obj) = s.as_object_mut() else {
            ops = None;
            continue; // the record reader reports it
        };
        if obj.contains_key("operator_spectrum") {
            rd.push(
                format!("{sp}/operator_spectrum"),
                "is computed from \"operator\" by the simulator; remove it",
            );
            obj.remove("operator_spectrum");
        }
        let op = match obj.remove("operator") {
            None => {
                rd.push(format!("{sp}/operator"), "is missing; name the operator the source multiplies: X, Y, Z, n (single site) or XX, YY, ZZ, XX+YY (two sites)");
                None
            }
            Some(Value::String(text)) => {
                let op = NoiseOperator::parse(&text);
                if op.is_none() {
                    rd.push(format!("{sp}/operator"), format!("\"{text}\" is not a known operator; use X, Y, Z, n (single site) or XX, YY, ZZ, XX+YY (two sites)"));
                }
                op
            }
            Some(_) => {
                rd.push(
                    format!("{sp}/operator"),
                    "must be a string such as \"Z\" or \"XX+YY\"",
                );
                None
            }
        };
        if let Some(op) = op {
            let arity_ok = match obj.get("acts_on") {
                Some(Value::String(a)) if a == "each_site" => op.arity() == 1,
                Some(Value::String(a)) if a == "each_bond" => op.arity() == 2,
                Some(Value::Object(m)) => {
                    m.get("sites").and_then(Value::as_array).is_none_or(|l| {
                        l.iter()
                            .all(|x| x.as_array().is_none_or(|x| x.len() == op.arity()))
                    })
                }
                _ => true, // the record reader reports a bad acts_on
            };
            if !arity_ok {
                rd.push(
                    format!("{sp}/operator"),
                    format!(
                        "\"{}\" acts on {} site(s), which does not match acts_on",
                        op.as_str(),
                        op.arity()
                    ),
                );
            }
        }
        let spectrum = op.map_or([-1.0, 1.0], NoiseOperator::spectrum);
        obj.insert("operator_spectrum".into(), serde_json::json!(spectrum));
        match (&mut ops, op) {
            (Some(v), Some(op)) => v.push(op),
            _ => ops = None,
        }
    }
    Some((body, ops))
}

/// The true noise: the declared record scaled, extended or replaced (docs/scenario.md).
pub(super) fn true_noise(
    rd: &mut Reader,
    v: &Value,
    declared: &(NoiseRecord, Vec<NoiseOperator>),
    declared_value: Option<&Value>,
) -> Option<(NoiseRecord, Vec<NoiseOperator>)> {
    let obj = rd.object(v, "/true_noise", &["scale", "sources", "extra_sources"])?;
    if obj.contains_key("sources") && obj.contains_key("extra_sources") {
        rd.push(
            "/true_noise",
            "gives both \"sources\" and \"extra_sources\"; use one",
        );
        return None;
    }
    let scale = match obj.get("scale") {
        None => 1.0,
        Some(s) => match rd.number(s, "/true_noise/scale") {
            Some(x) if x >= 0.0 => x,
            Some(_) => {
                rd.push("/true_noise/scale", "must not be negative");
                return None;
            }
            None => return None,
        },
    };
    // Parse a list of sources under the declared header; map the paths back.
    let parse_list = |rd: &mut Reader,
                      key: &str|
     -> Option<(Vec<crate::model::NoiseSource>, Vec<NoiseOperator>)> {
        let mut body = declared_value?.clone();
        body.as_object_mut()?
            .insert("sources".into(), obj.get(key)?.clone());
        let before = rd.problems.len();
        let (body, ops) = split_operators(rd, &body, "/true_noise", "/sources")?;
        // split_operators names paths /true_noise/sources/i; fix the key.
        for p in rd.problems.iter_mut().skip(before) {
            p.path = p
                .path
                .replacen("/true_noise/sources", &format!("/true_noise/{key}"), 1);
        }
        match noise_record_from_value(&body) {
            Ok(rec) => Some((rec.sources, ops?)),
            Err(ps) => {
                for p in ps {
                    if let Some(rest) = p.path.strip_prefix("/sources") {
                        rd.push(format!("/true_noise/{key}{rest}"), p.message);
                    }
                }
                None
            }
        }
    };
    let (mut base, mut base_ops) = if obj.contains_key("sources") {
        parse_list(rd, "sources")?
    } else {
        (declared.0.sources.clone(), declared.1.clone())
    };
    for s in &mut base {
        s.amplitude = match &s.amplitude {
            Amplitude::Scalar(a) => Amplitude::Scalar(a * scale),
            Amplitude::PerInstance(v) => {
                Amplitude::PerInstance(v.iter().map(|a| a * scale).collect())
            }
        };
    }
    if obj.contains_key("extra_sources") {
        let (extra, extra_ops) = parse_list(rd, "extra_sources")?;
        base.extend(extra);
        base_ops.extend(extra_ops);
    }
    let mut rec = declared.0.clone();
    rec.sources = base;
    Some((rec, base_ops))
}

/// The instances of one source on a lattice (the order of [`NoiseRecord::expand`]).
pub fn instance_supports(acts_on: &ActsOn, l: &Lattice) -> Vec<Vec<usize>> {
    match acts_on {
        ActsOn::EachSite => (0..l.n_sites()).map(|i| vec![i]).collect(),
        ActsOn::EachBond => l
            .bonds()
            .iter()
            .map(|b| vec![b[0] as usize, b[1] as usize])
            .collect(),
        ActsOn::Sites(v) => v.clone(),
    }
}
