//! Writer for noise records (JSON, format `quassay-noise` v1, v2 and v3), deterministic and
//! pretty-printed. A record is written in its own `format_version`; the device sections of
//! version 2 come after the sources, one entry per line.
//!
//! The simulator writes the record that goes with a synthetic run, and a user may want a
//! record rewritten in its canonical layout. The text is laid out by hand so that the keys come
//! in the order of docs/noise-record.md's example (a `serde_json::Map` would sort them), two spaces per
//! level, one source per block, short arrays and the `distribution` object on one line, and a
//! final newline. Numbers are printed by serde_json (shortest text that reads back to the same
//! double), strings are escaped by serde_json, so reading the output with
//! [`crate::inputs::noise_record::parse_noise_record`] gives back an equal record. Optional
//! offsets are always written, even when zero, so the file says everything explicitly.

use serde_json::Value;

use crate::inputs::noise_record::FORMAT;
use crate::model::device::{AppliesTo, Channel, ChannelSpec, DeviceRecord, SiteSet};
use crate::model::noise::{ActsOn, Amplitude, Calibration, Family, NoiseRecord, NoiseSource};

/// The record as pretty-printed JSON text with a trailing newline.
///
/// Every number of a record that passed the reader is finite; a non-finite number (possible
/// only in a record built by hand) has no JSON form and is written as `null`, which the reader
/// then refuses.
pub fn to_json_string(record: &NoiseRecord) -> String {
    let mut out = String::new();
    out.push_str("{\n");
    line(&mut out, 1, "format", &string(FORMAT), true);
    line(
        &mut out,
        1,
        "format_version",
        &record.format_version.to_string(),
        true,
    );
    line(
        &mut out,
        1,
        "frequency_unit",
        &string(record.frequency_unit.as_str()),
        true,
    );
    line(
        &mut out,
        1,
        "redrawn",
        &string(record.redrawn.as_str()),
        true,
    );
    out.push_str("  \"sources\": [\n");
    for (i, s) in record.sources.iter().enumerate() {
        source(&mut out, s);
        out.push_str(if i + 1 < record.sources.len() {
            ",\n"
        } else {
            "\n"
        });
    }
    out.push_str("  ]");
    device(&mut out, &record.device);
    match &record.calibration {
        None => out.push('\n'),
        Some(c) => {
            out.push_str(",\n");
            line(&mut out, 1, "calibration", &calibration(c), false);
        }
    }
    out.push_str("}\n");
    out
}

/// Writes `"key": value` at `depth` (two spaces each), with a comma if `more` follow.
fn line(out: &mut String, depth: usize, key: &str, value: &str, more: bool) {
    out.push_str(&"  ".repeat(depth));
    out.push_str(&string(key));
    out.push_str(": ");
    out.push_str(value);
    out.push_str(if more { ",\n" } else { "\n" });
}

fn source(out: &mut String, s: &NoiseSource) {
    out.push_str("    {\n");
    line(out, 3, "name", &string(&s.name), true);
    line(out, 3, "acts_on", &acts_on(&s.acts_on), true);
    line(
        out,
        3,
        "operator_spectrum",
        &numbers(&s.operator_spectrum),
        true,
    );
    let amplitude = match &s.amplitude {
        Amplitude::Scalar(a) => number(*a),
        Amplitude::PerInstance(v) => numbers(v),
    };
    line(out, 3, "amplitude", &amplitude, true);
    line(out, 3, "distribution", &distribution(&s.family), true);
    line(out, 3, "mean_offset", &number(s.mean_offset), true);
    line(
        out,
        3,
        "mean_offset_uncertainty",
        &number(s.mean_offset_uncertainty),
        s.correlation_time.is_some(),
    );
    if let Some((tau, unit)) = s.correlation_time {
        let value = format!(
            "{{\"value\": {}, \"unit\": {}}}",
            number(tau),
            string(unit.as_str())
        );
        line(out, 3, "correlation_time", &value, false);
    }
    out.push_str("    }");
}

/// The device sections present, each after a comma (the previous member has no trailing
/// comma or newline yet).
fn device(out: &mut String, d: &DeviceRecord) {
    let block = |out: &mut String, key: &str, items: Vec<String>| {
        out.push_str(&format!(",\n  {}: [\n", string(key)));
        let n = items.len();
        for (i, item) in items.into_iter().enumerate() {
            out.push_str("    ");
            out.push_str(&item);
            out.push_str(if i + 1 < n { ",\n" } else { "\n" });
        }
        out.push_str("  ]");
    };
    if let Some(channels) = &d.incoherent {
        block(out, "incoherent", channels.iter().map(channel).collect());
    }
    if let Some(entries) = &d.preparation {
        let items = entries
            .iter()
            .map(|p| {
                object(&[
                    ("acts_on", site_set(&p.acts_on)),
                    ("trace_distance", number(p.trace_distance)),
                    ("trace_distance_uncertainty", number(p.uncertainty)),
                ])
            })
            .collect();
        block(out, "preparation", items);
    }
    if let Some(r) = &d.readout {
        let applies = match &r.applies_to {
            AppliesTo::All => string("all"),
            AppliesTo::Names(names) => {
                let v: Vec<String> = names.iter().map(|n| string(n)).collect();
                format!("[{}]", v.join(", "))
            }
        };
        out.push_str(",\n  \"readout\": {\n");
        line(out, 2, "applies_to", &applies, true);
        out.push_str("    \"errors\": [\n");
        let n = r.entries.len();
        for (i, e) in r.entries.iter().enumerate() {
            out.push_str("      ");
            out.push_str(&object(&[
                ("acts_on", site_set(&e.acts_on)),
                ("flip_0_to_1", number(e.flip_0_to_1)),
                ("flip_1_to_0", number(e.flip_1_to_0)),
                ("flip_uncertainty", number(e.uncertainty)),
            ]));
            out.push_str(if i + 1 < n { ",\n" } else { "\n" });
        }
        out.push_str("    ]\n  }");
    }
}

fn channel(c: &Channel) -> String {
    let mut parts = vec![("name", string(&c.name)), ("acts_on", site_set(&c.acts_on))];
    match &c.spec {
        ChannelSpec::Rate {
            jump,
            rate,
            uncertainty,
            unit,
        } => parts.extend([
            ("jump", string(jump.as_str())),
            ("rate", number(*rate)),
            ("rate_uncertainty", number(*uncertainty)),
            ("rate_unit", string(unit.as_str())),
        ]),
        ChannelSpec::Times {
            t1,
            t1_uncertainty,
            t2,
            t2_uncertainty,
            unit,
        } => parts.extend([
            ("t1", number(*t1)),
            ("t1_uncertainty", number(*t1_uncertainty)),
            ("t2", number(*t2)),
            ("t2_uncertainty", number(*t2_uncertainty)),
            ("time_unit", string(unit.as_str())),
        ]),
    }
    object(&parts)
}

/// `{ "k": v, ... }` on one line, keys in the given order.
fn object(parts: &[(&str, String)]) -> String {
    let inner: Vec<String> = parts
        .iter()
        .map(|(k, v)| format!("{}: {v}", string(k)))
        .collect();
    format!("{{ {} }}", inner.join(", "))
}

fn site_set(s: &SiteSet) -> String {
    match s {
        SiteSet::EachSite => string("each_site"),
        SiteSet::Sites(v) => {
            let sites: Vec<String> = v.iter().map(|s| s.to_string()).collect();
            format!("{{ \"sites\": [{}] }}", sites.join(", "))
        }
    }
}

fn acts_on(a: &ActsOn) -> String {
    match a {
        ActsOn::EachSite => string("each_site"),
        ActsOn::EachBond => string("each_bond"),
        ActsOn::Sites(lists) => {
            let inner: Vec<String> = lists
                .iter()
                .map(|l| {
                    let sites: Vec<String> = l.iter().map(|s| s.to_string()).collect();
                    format!("[{}]", sites.join(", "))
                })
                .collect();
            format!("{{ \"sites\": [{}] }}", inner.join(", "))
        }
    }
}

fn distribution(f: &Family) -> String {
    let mut parts = vec![format!("\"family\": {}", string(f.name()))];
    let mut param = |k: &str, v: String| parts.push(format!("{}: {v}", string(k)));
    match *f {
        Family::Uniform | Family::TwoPoint => {}
        Family::Normal { sigma } => param("sigma", number(sigma)),
        Family::TruncatedNormal { sigma, cutoff } => {
            param("sigma", number(sigma));
            param("cutoff", number(cutoff));
        }
        Family::Bounded {
            lower,
            upper,
            std,
            symmetric,
        } => {
            param("lower", number(lower));
            param("upper", number(upper));
            param("std", number(std));
            param("symmetric", symmetric.to_string());
        }
    }
    format!("{{ {} }}", parts.join(", "))
}

fn calibration(c: &Calibration) -> String {
    let parts: Vec<String> = [
        ("method", &c.method),
        ("date", &c.date),
        ("notes", &c.notes),
    ]
    .into_iter()
    .filter_map(|(k, v)| v.as_ref().map(|v| format!("{}: {}", string(k), string(v))))
    .collect();
    if parts.is_empty() {
        "{}".to_string()
    } else {
        format!("{{ {} }}", parts.join(", "))
    }
}

/// A JSON string literal (serde_json's escaping).
fn string(s: &str) -> String {
    Value::String(s.to_string()).to_string()
}

/// A JSON number: serde_json prints the shortest decimal that reads back to the same double.
fn number(x: f64) -> String {
    Value::from(x).to_string()
}

fn numbers(xs: &[f64]) -> String {
    let parts: Vec<String> = xs.iter().map(|&x| number(x)).collect();
    format!("[{}]", parts.join(", "))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::inputs::noise_record::parse_noise_record;
    use crate::model::noise::Redrawn;
    use crate::model::units::FrequencyUnit;

    fn example() -> NoiseRecord {
        NoiseRecord {
            frequency_unit: FrequencyUnit::RadPerUs,
            redrawn: Redrawn::EveryRealization,
            sources: vec![NoiseSource {
                name: "site detuning".into(),
                acts_on: ActsOn::EachSite,
                operator_spectrum: [-1.0, 1.0],
                amplitude: Amplitude::Scalar(0.02),
                family: Family::Uniform,
                mean_offset: 0.0,
                mean_offset_uncertainty: 0.0,
                correlation_time: None,
            }],
            calibration: Some(Calibration {
                method: Some("free text".into()),
                date: Some("2026-11-30".into()),
                notes: Some("free text".into()),
            }),
            format_version: 1,
            device: Default::default(),
        }
    }

    #[test]
    fn a_documented_record_is_written_in_its_own_layout() {
        // The expected text is a one-source record laid out as the example of
        // docs/noise-record.md, except that the calibration object is written with the same
        // spacing as the distribution object.
        let expected = r#"{
  "format": "quassay-noise",
  "format_version": 1,
  "frequency_unit": "rad/us",
  "redrawn": "every_realization",
  "sources": [
    {
      "name": "site detuning",
      "acts_on": "each_site",
      "operator_spectrum": [-1.0, 1.0],
      "amplitude": 0.02,
      "distribution": { "family": "uniform" },
      "mean_offset": 0.0,
      "mean_offset_uncertainty": 0.0
    }
  ],
  "calibration": { "method": "free text", "date": "2026-11-30", "notes": "free text" }
}
"#;
        assert_eq!(to_json_string(&example()), expected);
    }

    #[test]
    fn every_form_reads_back_equal() {
        let mut r = example();
        r.calibration = None;
        r.sources.push(NoiseSource {
            name: "quote \" and \\ and é".into(),
            acts_on: ActsOn::Sites(vec![vec![0], vec![2, 1]]),
            operator_spectrum: [0.0, 1.0],
            amplitude: Amplitude::PerInstance(vec![0.1, 1e-7]),
            family: Family::Bounded {
                lower: -0.3,
                upper: 0.7,
                std: 0.1 + 0.2,
                symmetric: false,
            },
            mean_offset: -1.0 / 3.0,
            mean_offset_uncertainty: 5e-324,
            correlation_time: None,
        });
        r.sources.push(NoiseSource {
            name: "bond".into(),
            acts_on: ActsOn::EachBond,
            family: Family::TruncatedNormal {
                sigma: 0.5,
                cutoff: 2.0,
            },
            ..r.sources[0].clone()
        });
        let text = to_json_string(&r);
        assert!(text.ends_with("}\n"));
        assert!(!text.contains("calibration"));
        assert_eq!(parse_noise_record(&text).unwrap(), r);
        r.calibration = Some(Calibration::default());
        let text = to_json_string(&r);
        assert!(text.contains("\"calibration\": {}\n"));
        assert_eq!(parse_noise_record(&text).unwrap(), r);
    }

    /// Version 3: a correlation time is written after the offsets and reads back equal.
    #[test]
    fn a_correlation_time_reads_back_equal() {
        use crate::model::units::TimeUnit;
        let mut r = example();
        r.format_version = 3;
        r.sources[0].correlation_time = Some((0.1 + 0.2, TimeUnit::Ns));
        let text = to_json_string(&r);
        assert!(text.contains(
            "\"mean_offset_uncertainty\": 0.0,\n      \"correlation_time\": {\"value\": 0.30000000000000004, \"unit\": \"ns\"}\n"
        ));
        assert_eq!(parse_noise_record(&text).unwrap(), r);
    }
}
