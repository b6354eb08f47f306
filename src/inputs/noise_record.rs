//! Reader for noise records (JSON, format `quassay-noise` v1, v2 and v3; docs/noise-record.md).
//!
//! A noise record is the lab's description of the random local perturbations of its device.
//! Everything the bounds certify rests on it, so the reader is strict: every key is known,
//! every number is finite and in range, every unit is named, and every problem of a file is
//! reported at once with its JSON pointer (RFC 6901) and a fix. Three entry points:
//!
//! * [`read_noise_record`]: a file on disk (missing file: [`Error::Read`]; anything wrong
//!   inside: [`Error::Input`] with [`InputKind::NoiseRecord`]);
//! * [`parse_noise_record`]: JSON text, with duplicate keys detected (see `json`);
//! * [`noise_record_from_value`]: an already parsed value, e.g. a record embedded in a
//!   simulation scenario. Its paths are relative to that value, and its root is the empty
//!   pointer `""`, so an embedding reader prefixes them by plain concatenation. (The two
//!   text readers show the root as `/`, as [`Problem`] asks for the file as a whole.)

mod check;
mod json;
mod pointer;

use std::path::Path;

use crate::model::noise::NoiseRecord;
use crate::{Error, InputKind, Problem};

pub use check::{FORMAT, FORMAT_VERSION};

/// Reads and checks the noise record at `path`.
pub fn read_noise_record(path: &Path) -> crate::Result<NoiseRecord> {
    // A folder, FIFO or device is refused before it is read (reading a FIFO would block).
    let bytes = crate::inputs::regular::read_regular(
        path,
        "a noise record (JSON, format quassay-noise v1, v2 or v3)",
    )?;
    let fail = |problems| Error::Input {
        kind: InputKind::NoiseRecord,
        file: path.to_path_buf(),
        problems,
    };
    let text = std::str::from_utf8(&bytes).map_err(|e| fail(vec![utf8_problem(&bytes, &e)]))?;
    parse_noise_record(text).map_err(fail)
}

/// Parses and checks a noise record given as JSON text.
///
/// A UTF-8 byte-order mark at the start is ignored (RFC 8259 §8.1 allows a reader to).
/// Duplicated keys are errors; a syntax error is reported with its line and column.
pub fn parse_noise_record(text: &str) -> Result<NoiseRecord, Vec<Problem>> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let loaded = json::load(text).map_err(|p| vec![p])?;
    let checked = noise_record_from_value(&loaded.value);
    let mut problems = loaded.duplicates;
    match checked {
        Ok(record) if problems.is_empty() => Ok(record),
        Ok(_) => Err(problems),
        Err(more) => {
            problems.extend(more);
            for p in &mut problems {
                if p.path.is_empty() {
                    p.path.push('/');
                }
            }
            Err(problems)
        }
    }
}

/// Checks a noise record given as a parsed JSON value; paths are relative to `value`.
///
/// A `serde_json::Value` cannot hold two equal keys, so duplicates must be caught by whoever
/// parsed the text (as [`parse_noise_record`] does).
pub fn noise_record_from_value(value: &serde_json::Value) -> Result<NoiseRecord, Vec<Problem>> {
    check::record(value)
}

/// The problem for a file that is not UTF-8: where the first bad byte is.
fn utf8_problem(bytes: &[u8], e: &std::str::Utf8Error) -> Problem {
    if bytes.starts_with(&[0xff, 0xfe]) || bytes.starts_with(&[0xfe, 0xff]) {
        return Problem::new(
            "/",
            "is not valid UTF-8: it starts with a UTF-16 byte-order mark (the file was saved as \
             UTF-16); save it as UTF-8",
        );
    }
    let good = &bytes[..e.valid_up_to()];
    let line = 1 + good.iter().filter(|&&b| b == b'\n').count();
    let line_start = good.iter().rposition(|&b| b == b'\n').map_or(0, |i| i + 1);
    // Columns count characters, as serde_json's do; the prefix is valid UTF-8.
    let column = 1 + String::from_utf8_lossy(&good[line_start..]).chars().count();
    Problem::new(
        "/",
        format!(
            "is not valid UTF-8: byte {} (line {line}, column {column}) starts an invalid \
             sequence; save the file as UTF-8",
            e.valid_up_to()
        ),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::noise::{ActsOn, Amplitude, Family, Redrawn};
    use crate::model::units::FrequencyUnit;
    use serde_json::{json, Value};

    /// A one-source record (uniform detuning on every site) in the layout of the example of
    /// docs/noise-record.md.
    fn example() -> Value {
        json!({
            "format": "quassay-noise",
            "format_version": 1,
            "frequency_unit": "rad/us",
            "redrawn": "every_realization",
            "sources": [{
                "name": "site detuning",
                "acts_on": "each_site",
                "operator_spectrum": [-1.0, 1.0],
                "amplitude": 0.02,
                "distribution": { "family": "uniform" },
                "mean_offset": 0.0,
                "mean_offset_uncertainty": 0.0
            }],
            "calibration": { "method": "invented", "date": "2026-11-30", "notes": "invented" }
        })
    }

    /// The problems of `v` after `edit`; panics if it is accepted.
    fn problems_after(edit: impl FnOnce(&mut Value)) -> Vec<Problem> {
        let mut v = example();
        edit(&mut v);
        match noise_record_from_value(&v) {
            Ok(r) => panic!("accepted: {r:?}"),
            Err(p) => p,
        }
    }

    /// Asserts that one problem sits at `path` and its message contains `text`.
    fn has(problems: &[Problem], path: &str, text: &str) {
        assert!(
            problems
                .iter()
                .any(|p| p.path == path && p.message.contains(text)),
            "no problem at {path:?} containing {text:?} in {problems:#?}"
        );
    }

    fn source(v: &mut Value) -> &mut Value {
        &mut v["sources"][0]
    }

    #[test]
    fn the_documented_example_is_accepted() {
        let r = noise_record_from_value(&example()).unwrap();
        assert_eq!(r.frequency_unit, FrequencyUnit::RadPerUs);
        assert_eq!(r.redrawn, Redrawn::EveryRealization);
        let s = &r.sources[0];
        assert_eq!(s.acts_on, ActsOn::EachSite);
        assert_eq!(s.amplitude, Amplitude::Scalar(0.02));
        assert_eq!(s.family, Family::Uniform);
        assert_eq!(
            r.calibration.as_ref().unwrap().date.as_deref(),
            Some("2026-11-30")
        );
    }

    #[test]
    fn optional_keys_take_their_defaults() {
        let mut v = example();
        let s = source(&mut v).as_object_mut().unwrap();
        s.remove("mean_offset");
        s.remove("mean_offset_uncertainty");
        v.as_object_mut().unwrap().remove("calibration");
        let r = noise_record_from_value(&v).unwrap();
        assert_eq!(r.sources[0].mean_offset, 0.0);
        assert_eq!(r.sources[0].mean_offset_uncertainty, 0.0);
        assert_eq!(r.calibration, None);
    }

    #[test]
    fn format_and_version_are_checked() {
        let p = problems_after(|v| {
            v["format"] = json!("quassay-run");
            v["format_version"] = json!(4);
        });
        has(&p, "/format", "is `quassay-run`");
        has(&p, "/format_version", "version 4 is not supported");
        // As in JSON Schema, 1.0 is the integer 1.
        let mut v = example();
        v["format_version"] = json!(1.0);
        assert!(noise_record_from_value(&v).is_ok());
    }

    #[test]
    fn a_correlation_time_needs_version_3_a_positive_value_and_a_unit() {
        use crate::model::units::TimeUnit;
        let mut v = example();
        v["format_version"] = json!(3);
        source(&mut v)["correlation_time"] = json!({"value": 2.5, "unit": "us"});
        let r = noise_record_from_value(&v).expect("a version 3 record reads");
        assert_eq!(r.sources[0].correlation_time, Some((2.5, TimeUnit::Us)));
        assert_eq!(r.format_version, 3);
        // Version 3 without correlation times reads as version 2 did.
        let mut plain = example();
        plain["format_version"] = json!(3);
        let r = noise_record_from_value(&plain).expect("reads");
        assert_eq!(r.sources[0].correlation_time, None);
        for version in [1, 2] {
            let p = problems_after(|v| {
                v["format_version"] = json!(version);
                source(v)["correlation_time"] = json!({"value": 2.5, "unit": "us"});
            });
            has(
                &p,
                "/sources/0/correlation_time",
                "is a key of format version 3; set `format_version` to 3",
            );
        }
        for (bad, at, says) in [
            (json!({"value": 0.0, "unit": "us"}), "/value", "must be > 0"),
            (
                json!({"value": -1.0, "unit": "us"}),
                "/value",
                "must be > 0",
            ),
            (
                json!({"value": 1.0}),
                "",
                "the required key `unit` is missing",
            ),
            (
                json!({"value": 1.0, "unit": "min"}),
                "/unit",
                "unknown value `min`",
            ),
            (json!(2.0), "", "must be an object"),
        ] {
            let p = problems_after(|v| {
                v["format_version"] = json!(3);
                source(v)["correlation_time"] = bad.clone();
            });
            has(&p, &format!("/sources/0/correlation_time{at}"), says);
        }
    }

    #[test]
    fn unknown_keys_are_errors_everywhere_with_suggestions() {
        let p = problems_after(|v| {
            v["calibraton"] = json!({});
            let s = source(v);
            let a = s.as_object_mut().unwrap().remove("amplitude").unwrap();
            s["amplitdue"] = a;
            s["distribution"] = json!({"family": "normal", "sgima": 0.1});
            v["calibration"]["operator"] = json!("x");
        });
        has(&p, "/calibraton", "did you mean `calibration`?");
        has(
            &p,
            "/sources/0/amplitdue",
            "unknown key `amplitdue`; did you mean `amplitude`?",
        );
        has(&p, "/sources/0", "the required key `amplitude` is missing");
        has(&p, "/sources/0/distribution/sgima", "did you mean `sigma`?");
        has(&p, "/sources/0/distribution", "needs the parameter `sigma`");
        has(
            &p,
            "/calibration/operator",
            "unknown key `operator`; the keys allowed here",
        );
    }

    #[test]
    fn every_required_key_is_reported_missing_at_once() {
        let p = problems_after(|v| *v = json!({}));
        for key in [
            "format",
            "format_version",
            "frequency_unit",
            "redrawn",
            "sources",
        ] {
            has(&p, "", &format!("`{key}` is missing"));
        }
        assert_eq!(p.len(), 5);
        let p = problems_after(|v| *source(v) = json!({}));
        assert_eq!(p.len(), 5, "{p:#?}");
        has(&p, "/sources/0", "`operator_spectrum` is missing");
    }

    #[test]
    fn a_record_that_is_not_an_object_is_refused() {
        let p = problems_after(|v| *v = json!([1, 2]));
        has(
            &p,
            "",
            "must be the noise record (a JSON object), got an array",
        );
    }

    #[test]
    fn frequency_units_are_named_and_case_sensitive() {
        let p = problems_after(|v| v["frequency_unit"] = json!("mhz"));
        has(&p, "/frequency_unit", "unknown frequency unit `mhz`");
        has(
            &p,
            "/frequency_unit",
            "rad/s, rad/ms, rad/us, rad/ns, Hz, kHz, MHz, GHz",
        );
        has(&p, "/frequency_unit", "did you mean `MHz`?");
        let p = problems_after(|v| v["frequency_unit"] = json!("rad/µs"));
        has(&p, "/frequency_unit", "did you mean `rad/us`?");
        let p = problems_after(|v| v["frequency_unit"] = json!(1));
        has(&p, "/frequency_unit", "must be a string");
    }

    #[test]
    fn redrawn_takes_three_values() {
        for (word, r) in [
            ("every_shot", Redrawn::EveryShot),
            ("every_realization", Redrawn::EveryRealization),
            ("once", Redrawn::Once),
        ] {
            let mut v = example();
            v["redrawn"] = json!(word);
            assert_eq!(noise_record_from_value(&v).unwrap().redrawn, r);
        }
        let p = problems_after(|v| v["redrawn"] = json!("every_realisation"));
        has(&p, "/redrawn", "did you mean `every_realization`?");
    }

    #[test]
    fn sources_must_be_a_non_empty_array_with_unique_names() {
        let p = problems_after(|v| v["sources"] = json!([]));
        has(&p, "/sources", "is empty");
        let p = problems_after(|v| v["sources"] = json!({}));
        has(&p, "/sources", "must be an array");
        let p = problems_after(|v| {
            let s = v["sources"][0].clone();
            v["sources"] = json!([s.clone(), s.clone(), s]);
        });
        has(
            &p,
            "/sources/1/name",
            "repeats the name `site detuning` of /sources/0",
        );
        has(&p, "/sources/2/name", "of /sources/0");
        let p = problems_after(|v| source(v)["name"] = json!("  "));
        has(&p, "/sources/0/name", "is empty");
    }

    #[test]
    fn acts_on_accepts_the_three_forms() {
        let mut v = example();
        source(&mut v)["acts_on"] = json!("each_bond");
        assert_eq!(
            noise_record_from_value(&v).unwrap().sources[0].acts_on,
            ActsOn::EachBond
        );
        source(&mut v)["acts_on"] = json!({"sites": [[0], [3, 1], [2.0]]});
        assert_eq!(
            noise_record_from_value(&v).unwrap().sources[0].acts_on,
            ActsOn::Sites(vec![vec![0], vec![3, 1], vec![2]])
        );
    }

    #[test]
    fn acts_on_lists_are_checked_element_by_element() {
        let p = problems_after(|v| source(v)["acts_on"] = json!("each_sites"));
        has(&p, "/sources/0/acts_on", "did you mean `each_site`?");
        let p = problems_after(|v| source(v)["acts_on"] = json!({"sites": []}));
        has(&p, "/sources/0/acts_on/sites", "is empty");
        let p = problems_after(|v| {
            source(v)["acts_on"] = json!({"sites": [[0], [], [1, -1, 1.5], [2, 2]], "bonds": 1})
        });
        has(&p, "/sources/0/acts_on/bonds", "unknown key `bonds`");
        has(&p, "/sources/0/acts_on/sites/1", "is empty");
        has(&p, "/sources/0/acts_on/sites/2/1", "got -1");
        has(&p, "/sources/0/acts_on/sites/2/2", "got 1.5");
        has(&p, "/sources/0/acts_on/sites/3/1", "repeats site 2");
        let p = problems_after(|v| source(v)["acts_on"] = json!(3));
        has(&p, "/sources/0/acts_on", "got a number");
    }

    #[test]
    fn operator_spectrum_must_be_an_ordered_pair_with_spread() {
        let p = problems_after(|v| source(v)["operator_spectrum"] = json!([1.0, 1.0]));
        has(&p, "/sources/0/operator_spectrum", "zero spread");
        let p = problems_after(|v| source(v)["operator_spectrum"] = json!([1.0, 0.0]));
        has(&p, "/sources/0/operator_spectrum", "is reversed");
        let p = problems_after(|v| source(v)["operator_spectrum"] = json!([-1, 0, 1]));
        has(&p, "/sources/0/operator_spectrum", "has 3 entries");
        let p = problems_after(|v| source(v)["operator_spectrum"] = json!(["-1", 1]));
        has(&p, "/sources/0/operator_spectrum/0", "must be a number");
    }

    #[test]
    fn amplitudes_are_non_negative_numbers_or_arrays_of_them() {
        let p = problems_after(|v| source(v)["amplitude"] = json!(-0.01));
        has(&p, "/sources/0/amplitude", "must be ≥ 0, got -0.01");
        let p = problems_after(|v| source(v)["amplitude"] = json!([0.1, -2, "x"]));
        has(&p, "/sources/0/amplitude/1", "must be ≥ 0");
        has(&p, "/sources/0/amplitude/2", "must be a number");
        let p = problems_after(|v| source(v)["amplitude"] = json!([]));
        has(&p, "/sources/0/amplitude", "empty array");
        let mut v = example();
        source(&mut v)["amplitude"] = json!([0, 0.5]);
        assert_eq!(
            noise_record_from_value(&v).unwrap().sources[0].amplitude,
            Amplitude::PerInstance(vec![0.0, 0.5])
        );
    }

    #[test]
    fn families_take_exactly_their_parameters() {
        let cases = [
            (json!({"family": "uniform"}), Family::Uniform),
            (json!({"family": "two_point"}), Family::TwoPoint),
            (
                json!({"family": "normal", "sigma": 0.5}),
                Family::Normal { sigma: 0.5 },
            ),
            (
                json!({"family": "truncated_normal", "sigma": 1, "cutoff": 2}),
                Family::TruncatedNormal {
                    sigma: 1.0,
                    cutoff: 2.0,
                },
            ),
            (
                json!({"family": "bounded", "lower": -1, "upper": 3, "std": 1.7320508075688772,
                       "symmetric": false}),
                Family::Bounded {
                    lower: -1.0,
                    upper: 3.0,
                    std: 1.7320508075688772,
                    symmetric: false,
                },
            ),
        ];
        for (d, f) in cases {
            let mut v = example();
            source(&mut v)["distribution"] = d;
            assert_eq!(noise_record_from_value(&v).unwrap().sources[0].family, f);
        }
        let p = problems_after(|v| {
            source(v)["distribution"] = json!({"family": "uniform", "sigma": 1})
        });
        has(
            &p,
            "/sources/0/distribution/sigma",
            "not a parameter of the `uniform` family",
        );
        let p = problems_after(|v| source(v)["distribution"] = json!({"family": "gaussian"}));
        has(
            &p,
            "/sources/0/distribution/family",
            "unknown value `gaussian`",
        );
        let p = problems_after(|v| source(v)["distribution"] = json!({"sigma": 1}));
        has(&p, "/sources/0/distribution", "`family` is missing");
        let p = problems_after(|v| {
            source(v)["distribution"] = json!({"family": "truncated_normal", "sigma": 0,
                                               "cutoff": -1})
        });
        has(&p, "/sources/0/distribution/sigma", "must be > 0");
        has(&p, "/sources/0/distribution/cutoff", "must be > 0");
    }

    #[test]
    fn bounded_laws_must_admit_a_zero_mean_and_their_std() {
        let bounded = |l: f64, u: f64, s: f64, sym: bool| json!({"family": "bounded", "lower": l, "upper": u, "std": s, "symmetric": sym});
        let p = problems_after(|v| source(v)["distribution"] = bounded(0.1, 1.0, 0.1, false));
        has(&p, "/sources/0/distribution/lower", "must be ≤ 0");
        let p = problems_after(|v| source(v)["distribution"] = bounded(0.0, 0.0, 0.0, false));
        has(&p, "/sources/0/distribution", "lower = upper = 0");
        // Bhatia–Davis: on [-1, 3] with mean 0 the variance is at most 3, std at most √3.
        let p = problems_after(|v| source(v)["distribution"] = bounded(-1.0, 3.0, 1.7321, false));
        has(&p, "/sources/0/distribution/std", "Bhatia–Davis");
        let p = problems_after(|v| source(v)["distribution"] = bounded(-0.2, 0.5, 0.1, true));
        has(
            &p,
            "/sources/0/distribution/symmetric",
            "not symmetric about 0",
        );
        let p = problems_after(|v| {
            source(v)["distribution"] = json!({"family": "bounded", "lower": -1, "upper": 1,
                                               "std": 0.5, "symmetric": "yes"})
        });
        has(
            &p,
            "/sources/0/distribution/symmetric",
            "must be true or false",
        );
        // The two-point law on ±1 attains the bound exactly: std 1 on [-1, 1] is accepted.
        let mut v = example();
        source(&mut v)["distribution"] = bounded(-1.0, 1.0, 1.0, true);
        assert!(noise_record_from_value(&v).is_ok());
    }

    #[test]
    fn mean_offsets_are_checked() {
        let p = problems_after(|v| {
            source(v)["mean_offset"] = json!(null);
            source(v)["mean_offset_uncertainty"] = json!(-0.1);
        });
        has(&p, "/sources/0/mean_offset", "must be a number");
        has(&p, "/sources/0/mean_offset_uncertainty", "must be ≥ 0");
        let mut v = example();
        source(&mut v)["mean_offset"] = json!(-0.25);
        assert_eq!(
            noise_record_from_value(&v).unwrap().sources[0].mean_offset,
            -0.25
        );
    }

    #[test]
    fn calibration_holds_only_optional_strings() {
        let p = problems_after(|v| v["calibration"] = json!({"date": 20261130}));
        has(&p, "/calibration/date", "must be a string");
        let p = problems_after(|v| v["calibration"] = json!("lab book"));
        has(&p, "/calibration", "must be an object");
    }

    #[test]
    fn text_parsing_reports_duplicates_together_with_other_problems() {
        let text = r#"{"format": "quassay-noise", "format_version": 1, "format_version": 1,
            "frequency_unit": "MHz", "redrawn": "once", "sources": [{"name": "a",
            "acts_on": "each_site", "operator_spectrum": [0, 1], "amplitude": -1,
            "amplitude": 1, "distribution": {"family": "two_point"}}]}"#;
        let p = parse_noise_record(text).unwrap_err();
        has(&p, "/format_version", "appears more than once");
        has(&p, "/sources/0/amplitude", "appears more than once");
        assert_eq!(p.len(), 2, "{p:#?}");
    }

    #[test]
    fn root_problems_are_shown_at_slash_in_text_and_empty_in_values() {
        let p = parse_noise_record("{}").unwrap_err();
        assert!(p.iter().all(|p| p.path == "/"));
        let p = noise_record_from_value(&json!({})).unwrap_err();
        assert!(p.iter().all(|p| p.path.is_empty()));
    }

    #[test]
    fn byte_order_mark_is_ignored_and_bad_utf8_located() {
        let text = format!("\u{feff}{}", example());
        assert!(parse_noise_record(&text).is_ok());
        let bytes = b"{\n  \"a\xff\": 1}".to_vec();
        let e = std::str::from_utf8(&bytes).unwrap_err();
        let p = utf8_problem(&bytes, &e);
        assert!(
            p.message.contains("byte 6 (line 2, column 5)"),
            "{}",
            p.message
        );
    }

    #[test]
    fn reading_files_distinguishes_missing_files_from_bad_content() {
        let dir = tempfile::tempdir().unwrap();
        let missing = dir.path().join("absent.json");
        assert!(matches!(
            read_noise_record(&missing),
            Err(Error::Read { .. })
        ));
        let bad = dir.path().join("bad.json");
        std::fs::write(&bad, b"\xfe\xff").unwrap();
        match read_noise_record(&bad) {
            Err(Error::Input { kind, problems, .. }) => {
                assert_eq!(kind, InputKind::NoiseRecord);
                assert!(problems[0].message.contains("UTF-8"));
            }
            other => panic!("{other:?}"),
        }
        let good = dir.path().join("good.json");
        std::fs::write(&good, example().to_string()).unwrap();
        assert!(read_noise_record(&good).is_ok());
    }
}
