//! Integration tests for noise records: the files under `tests/reference/noise/` against the
//! schema (`schemas/noise-record.schema.json`, checked with the `jsonschema` crate and, through
//! the committed `schema-verdicts.json`, with python-jsonschema) and against the reader, the
//! round trip through the writer, and expansion against lattices.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use quassay::inputs::noise_record::{parse_noise_record, read_noise_record};
use quassay::model::lattice::{Boundary, Geometry, Lattice};
use quassay::model::noise::NoiseRecord;
use quassay::model::units::TimeUnit;
use quassay::outputs::noise_record::to_json_string;
use quassay::{Error, Problem};

use crate::util::{reference, repo};

/// Every `.json` file of `tests/reference/noise/<folder>`, sorted.
fn records(folder: &str) -> Vec<PathBuf> {
    let dir = reference("noise").join(folder);
    let mut out: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .collect();
    out.sort();
    assert!(!out.is_empty(), "no records in {}", dir.display());
    out
}

fn name(p: &Path) -> String {
    p.file_name().unwrap().to_string_lossy().into_owned()
}

fn validator() -> jsonschema::Validator {
    let text = std::fs::read_to_string(repo().join("schemas/noise-record.schema.json")).unwrap();
    let schema: serde_json::Value = serde_json::from_str(&text).unwrap();
    // The schema must itself be a valid draft 2020-12 schema.
    assert!(jsonschema::meta::is_valid(&schema));
    jsonschema::draft202012::new(&schema).unwrap()
}

/// `Some(valid?)` from the Rust validator, `None` if serde_json cannot load the file.
fn schema_verdict(v: &jsonschema::Validator, path: &Path) -> Option<bool> {
    let bytes = std::fs::read(path).unwrap();
    let value: serde_json::Value = serde_json::from_slice(&bytes).ok()?;
    Some(v.is_valid(&value))
}

fn problems_of(path: &Path) -> Vec<Problem> {
    match read_noise_record(path) {
        Ok(r) => panic!("{} was accepted: {r:?}", path.display()),
        Err(Error::Input { problems, .. }) => problems,
        Err(e) => panic!("{}: not an input error: {e}", path.display()),
    }
}

/// Asserts that the reader's problems for `path` include one at `pointer` containing `text`.
fn assert_problem(path: &Path, pointer: &str, text: &str) {
    let problems = problems_of(path);
    assert!(
        problems
            .iter()
            .any(|p| p.path == pointer && p.message.contains(text)),
        "{}: expected a problem at {pointer:?} containing {text:?}, got {problems:#?}",
        name(path)
    );
}

#[test]
fn valid_records_pass_the_schema_and_the_reader() {
    let v = validator();
    for path in records("valid") {
        assert_eq!(schema_verdict(&v, &path), Some(true), "{}", name(&path));
        if let Err(e) = read_noise_record(&path) {
            panic!("{}: {e}", name(&path));
        }
    }
}

#[test]
fn valid_records_survive_the_writer_unchanged() {
    for path in records("valid") {
        let record = read_noise_record(&path).unwrap();
        let text = to_json_string(&record);
        assert_eq!(
            parse_noise_record(&text).unwrap(),
            record,
            "{}",
            name(&path)
        );
        // Deterministic: writing the reread record gives the same bytes.
        assert_eq!(to_json_string(&parse_noise_record(&text).unwrap()), text);
    }
}

/// For every file of `invalid/`: where the reader must complain, and what it must say.
const INVALID: &[(&str, &str, &str)] = &[
    (
        "acts-on-empty-support.json",
        "/sources/0/acts_on/sites/1",
        "is empty",
    ),
    (
        "acts-on-fractional-site.json",
        "/sources/0/acts_on/sites/0/0",
        "non-negative integer",
    ),
    (
        "acts-on-negative-site.json",
        "/sources/0/acts_on/sites/1/0",
        "got -1",
    ),
    (
        "acts-on-repeated-site.json",
        "/sources/0/acts_on/sites/1/1",
        "repeats site 2",
    ),
    (
        "acts-on-unknown-key.json",
        "/sources/0/acts_on/bonds",
        "unknown key `bonds`",
    ),
    (
        "acts-on-unknown-word.json",
        "/sources/0/acts_on",
        "did you mean `each_site`?",
    ),
    ("blank-name.json", "/sources/0/name", "is empty"),
    (
        "bounded-missing-symmetric.json",
        "/sources/0/distribution",
        "parameter `symmetric`",
    ),
    (
        "bounded-negative-std.json",
        "/sources/0/distribution/std",
        "must be ≥ 0",
    ),
    (
        "bounded-positive-lower.json",
        "/sources/0/distribution/lower",
        "must be ≤ 0",
    ),
    (
        "calibration-not-string.json",
        "/calibration/date",
        "must be a string",
    ),
    (
        "correlation-time-in-version-1.json",
        "/sources/0/correlation_time",
        "is a key of format version 3",
    ),
    (
        "correlation-time-in-version-2.json",
        "/sources/0/correlation_time",
        "is a key of format version 3",
    ),
    (
        "correlation-time-missing-unit.json",
        "/sources/0/correlation_time",
        "the required key `unit` is missing",
    ),
    (
        "correlation-time-negative.json",
        "/sources/0/correlation_time/value",
        "must be > 0",
    ),
    (
        "correlation-time-zero.json",
        "/sources/0/correlation_time/value",
        "must be > 0",
    ),
    (
        "device-empty-applies-to.json",
        "/readout/applies_to",
        "is empty",
    ),
    (
        "device-in-version-1.json",
        "/incoherent",
        "set `format_version` to 2",
    ),
    (
        "device-missing-rate-unit.json",
        "/incoherent/1",
        "`rate_unit` is missing",
    ),
    (
        "device-missing-time-unit.json",
        "/incoherent/0",
        "`time_unit` is missing",
    ),
    ("device-mixed-forms.json", "/incoherent/1", "mixes a jump"),
    (
        "device-negative-rate.json",
        "/incoherent/1/rate",
        "must be ≥ 0, got -1",
    ),
    (
        "device-probability-above-one.json",
        "/readout/errors/0/flip_1_to_0",
        "lies in [0, 1]",
    ),
    (
        "device-trace-distance-above-one.json",
        "/preparation/0/trace_distance",
        "lies in [0, 1]",
    ),
    (
        "device-unknown-jump.json",
        "/incoherent/1/jump",
        "unknown value `amplitude_damping`",
    ),
    (
        "device-unknown-key.json",
        "/preparation/0/trace_distance_uncertainy",
        "did you mean `trace_distance_uncertainty`?",
    ),
    (
        "distribution-unknown-key.json",
        "/sources/0/distribution/sgima",
        "did you mean `sigma`?",
    ),
    (
        "distribution-without-family.json",
        "/sources/0/distribution",
        "`family` is missing",
    ),
    (
        "empty-amplitude-array.json",
        "/sources/0/amplitude",
        "empty array",
    ),
    ("empty-sources.json", "/sources", "is empty"),
    ("missing-acts-on.json", "/sources/0", "`acts_on` is missing"),
    (
        "missing-amplitude.json",
        "/sources/0",
        "`amplitude` is missing",
    ),
    ("missing-format.json", "/", "`format` is missing"),
    ("missing-unit.json", "/", "`frequency_unit` is missing"),
    (
        "negative-amplitude-in-array.json",
        "/sources/0/amplitude/1",
        "must be ≥ 0, got -0.01",
    ),
    (
        "negative-amplitude.json",
        "/sources/0/amplitude",
        "must be ≥ 0, got -0.02",
    ),
    (
        "negative-offset-uncertainty.json",
        "/sources/0/mean_offset_uncertainty",
        "must be ≥ 0",
    ),
    (
        "normal-without-sigma.json",
        "/sources/0/distribution",
        "parameter `sigma`",
    ),
    ("not-an-object.json", "/", "got an array"),
    (
        "source-unknown-key.json",
        "/sources/0/amplitdue",
        "did you mean `amplitude`?",
    ),
    ("sources-not-array.json", "/sources", "must be an array"),
    (
        "spectrum-three-entries.json",
        "/sources/0/operator_spectrum",
        "has 3 entries",
    ),
    (
        "top-unknown-key.json",
        "/calibraton",
        "did you mean `calibration`?",
    ),
    (
        "truncated-normal-without-cutoff.json",
        "/sources/0/distribution",
        "parameter `cutoff`",
    ),
    (
        "truncated-normal-zero-sigma.json",
        "/sources/0/distribution/sigma",
        "must be > 0",
    ),
    (
        "uniform-with-sigma.json",
        "/sources/0/distribution/sigma",
        "not a parameter of the `uniform`",
    ),
    (
        "unknown-family.json",
        "/sources/0/distribution/family",
        "unknown value `gaussian`",
    ),
    (
        "unknown-redrawn.json",
        "/redrawn",
        "did you mean `every_realization`?",
    ),
    (
        "unknown-unit.json",
        "/frequency_unit",
        "did you mean `MHz`?",
    ),
    ("wrong-format.json", "/format", "is `quassay-run`"),
    (
        "wrong-version.json",
        "/format_version",
        "version 4 is not supported",
    ),
];

/// For every file of `invalid-parser-only/`: the same, for rules a schema cannot state.
const PARSER_ONLY: &[(&str, &str, &str)] = &[
    (
        "bounded-std-too-large.json",
        "/sources/0/distribution/std",
        "Bhatia–Davis",
    ),
    (
        "bounded-symmetric-unequal-bounds.json",
        "/sources/0/distribution/symmetric",
        "not symmetric",
    ),
    (
        "bounded-zero-width.json",
        "/sources/0/distribution",
        "lower = upper = 0",
    ),
    ("deep-nesting.json", "/", "nested more than 128 levels"),
    (
        "device-repeated-channel-name.json",
        "/incoherent/2/name",
        "repeats the name `T1 and T2`",
    ),
    (
        "device-t1-uncertainty-not-below-t1.json",
        "/incoherent/0/t1_uncertainty",
        "not below T1",
    ),
    (
        "device-t2-above-2t1.json",
        "/incoherent/0/t2",
        "more than 2·T1",
    ),
    (
        "duplicate-key-in-distribution.json",
        "/sources/0/distribution/family",
        "more than once",
    ),
    (
        "duplicate-key-in-source.json",
        "/sources/0/amplitude",
        "more than once",
    ),
    ("duplicate-key-top.json", "/redrawn", "more than once"),
    (
        "duplicate-source-names.json",
        "/sources/1/name",
        "repeats the name `site detuning`",
    ),
    ("huge-number.json", "/", "too large for a 64-bit float"),
    ("not-utf8.json", "/", "not valid UTF-8"),
    (
        "spectrum-reversed.json",
        "/sources/0/operator_spectrum",
        "is reversed",
    ),
    (
        "spectrum-zero-spread.json",
        "/sources/0/operator_spectrum",
        "zero spread",
    ),
    ("syntax-error.json", "/", "line 3, column 20"),
    ("trailing-comma.json", "/", "is not valid JSON"),
];

/// The files of `folder` and the table must name the same files.
fn table_covers(folder: &str, table: &[(&str, &str, &str)]) {
    let files: Vec<String> = records(folder).iter().map(|p| name(p)).collect();
    let listed: Vec<String> = table.iter().map(|(f, _, _)| f.to_string()).collect();
    assert_eq!(files, listed, "{folder}/ and its table differ");
}

#[test]
fn invalid_records_fail_the_schema_and_the_reader_for_the_stated_reason() {
    table_covers("invalid", INVALID);
    let v = validator();
    for (file, pointer, text) in INVALID {
        let path = reference("noise/invalid").join(file);
        assert_eq!(
            schema_verdict(&v, &path),
            Some(false),
            "{file}: schema accepted it"
        );
        assert_problem(&path, pointer, text);
    }
}

#[test]
fn parser_only_records_pass_or_escape_the_schema_but_fail_the_reader() {
    table_covers("invalid-parser-only", PARSER_ONLY);
    let v = validator();
    for (file, pointer, text) in PARSER_ONLY {
        let path = reference("noise/invalid-parser-only").join(file);
        // If the schema could refuse it, the file would belong in invalid/.
        assert_ne!(
            schema_verdict(&v, &path),
            Some(false),
            "{file}: move it to invalid/"
        );
        assert_problem(&path, pointer, text);
    }
}

#[test]
fn the_rust_and_python_schema_validators_agree_on_every_file() {
    // schema-verdicts.json was written by tests/reference/noise/schema_verdicts.py with
    // python-jsonschema (Draft202012Validator), an independent implementation.
    let text = std::fs::read_to_string(reference("noise/schema-verdicts.json")).unwrap();
    let json: serde_json::Value = serde_json::from_str(&text).unwrap();
    let verdicts: BTreeMap<String, String> =
        serde_json::from_value(json["verdicts"].clone()).unwrap();
    let v = validator();
    let mut compared = 0;
    for folder in ["valid", "invalid", "invalid-parser-only"] {
        for path in records(folder) {
            let key = format!("{folder}/{}", name(&path));
            let python = verdicts
                .get(&key)
                .unwrap_or_else(|| panic!("{key}: rerun the script"));
            match (schema_verdict(&v, &path), python.as_str()) {
                (Some(ours), "valid" | "invalid") => {
                    assert_eq!(ours, python == "valid", "{key}");
                    compared += 1;
                }
                (None, _) => {} // serde_json cannot load it (deep nesting, not JSON)
                (Some(_), other) => panic!("{key}: python says {other}, serde_json loads it"),
            }
        }
    }
    // Every file python loaded was compared, except deep-nesting.json (serde_json's limit).
    assert_eq!(
        compared,
        verdicts.values().filter(|v| *v != "not-json").count() - 1
    );
}

fn chain(n: usize) -> Lattice {
    Lattice::regular(Geometry::Chain, &[n], Boundary::Open).unwrap()
}

fn valid(file: &str) -> NoiseRecord {
    read_noise_record(&reference("noise/valid").join(file)).unwrap()
}

#[test]
fn the_same_noise_in_megahertz_and_radians_per_microsecond_gives_the_same_deltas() {
    // Angular frequency ω = 2π f (SI Brochure, 9th edition, on the hertz and rad/s; from
    // memory): 1 MHz is 2π rad/us. The rad/us file holds the MHz amplitudes times 2π, printed
    // to 17 significant digits by Python, so the deltas agree to rounding (a few ulps).
    let l = chain(4);
    for unit in [TimeUnit::Us, TimeUnit::Ns, TimeUnit::S] {
        let a = valid("units-mhz.json").expand(&l, unit).unwrap();
        let b = valid("units-rad-per-us.json").expand(&l, unit).unwrap();
        assert_eq!(a.instances.len(), 4);
        for (x, y) in a.instances.iter().zip(&b.instances) {
            assert!(
                (x.delta - y.delta).abs() <= 4.0 * f64::EPSILON * x.delta,
                "{unit}: {} vs {}",
                x.delta,
                y.delta
            );
        }
    }
    // 0.25 MHz on a Pauli-like operator (spread 2, half spread 1) is π/2 rad/us exactly,
    // and π/2000 rad/ns.
    let us = valid("units-mhz.json").expand(&l, TimeUnit::Us).unwrap();
    assert_eq!(us.instances[0].delta, std::f64::consts::FRAC_PI_2);
    let ns = valid("units-mhz.json").expand(&l, TimeUnit::Ns).unwrap();
    assert!((ns.instances[0].delta - std::f64::consts::FRAC_PI_2 * 1e-3).abs() < 1e-18);
}

#[test]
fn expanding_the_mixed_record_on_a_square_lattice_counts_every_instance() {
    // 2 x 2 open square lattice: 4 sites, 4 bonds ([0,2], [0,1], [1,3], [2,3]).
    let l = Lattice::regular(Geometry::Square, &[2, 2], Boundary::Open).unwrap();
    let m = valid("square-mixed-sources.json")
        .expand(&l, TimeUnit::Us)
        .unwrap();
    let per_source: Vec<usize> = (0..3)
        .map(|s| m.instances.iter().filter(|i| i.source == s).count())
        .collect();
    assert_eq!(per_source, [4, 4, 3]);
    let bonds: Vec<(Vec<usize>, Option<usize>)> = m
        .instances
        .iter()
        .filter(|i| i.source == 1)
        .map(|i| (i.support.clone(), i.bond))
        .collect();
    assert_eq!(
        bonds,
        [
            (vec![0, 2], Some(0)),
            (vec![0, 1], Some(1)),
            (vec![1, 3], Some(2)),
            (vec![2, 3], Some(3))
        ]
    );
    // "beam edge": listed support [2, 1] is sorted; projector spread 1, so δ = 2π·A/2.
    let last = m.instances.last().unwrap();
    assert_eq!(last.support, [1, 2]);
    assert_eq!(last.delta, 0.0025 * std::f64::consts::TAU * 0.5);
    assert_eq!(last.mean_offset, -0.05);
}

#[test]
fn expansion_errors_name_the_place_in_the_record() {
    // each_bond on a lattice without bonds (a single site).
    let p = valid("square-mixed-sources.json")
        .expand(&chain(1), TimeUnit::Us)
        .unwrap_err();
    assert!(p
        .iter()
        .any(|p| p.path == "/sources/1/acts_on" && p.message.contains("no bonds")));
    // Listed supports [0], [3], [2, 1] on a 1-site chain: sites 3, 2 and 1 do not exist.
    assert!(p.iter().any(|p| p.path == "/sources/2/acts_on/sites/1/0"));
    assert!(p.iter().any(|p| p.path == "/sources/2/acts_on/sites/2/1"));
    // Amplitude arrays with one value per site (4) on a 5-site chain.
    let p = valid("units-mhz.json")
        .expand(&chain(5), TimeUnit::Us)
        .unwrap_err();
    assert_eq!(p.len(), 1);
    assert_eq!(p[0].path, "/sources/0/amplitude");
    assert!(p[0]
        .message
        .contains("has 4 values, but the source has 5 instances"));
    // The minimal record's support [0, 1, 2, 3] needs 4 sites.
    let p = valid("minimal.json")
        .expand(&chain(2), TimeUnit::Ms)
        .unwrap_err();
    let paths: Vec<&str> = p.iter().map(|p| p.path.as_str()).collect();
    assert_eq!(
        paths,
        [
            "/sources/0/acts_on/sites/0/2",
            "/sources/0/acts_on/sites/0/3"
        ]
    );
}

#[test]
fn a_missing_file_is_a_read_error_naming_it() {
    let dir = crate::util::scratch();
    let path = dir.path().join("no-such-record.json");
    let e = read_noise_record(&path).unwrap_err();
    assert!(matches!(e, Error::Read { .. }));
    assert!(e.to_string().contains("no-such-record.json"));
}

#[test]
fn input_errors_name_the_file_and_every_problem() {
    let path = reference("noise/invalid/missing-format.json");
    let e = read_noise_record(&path).unwrap_err();
    let text = e.to_string();
    assert!(text.starts_with("noise record '"), "{text}");
    assert!(
        text.contains("missing-format.json' has a problem:"),
        "{text}"
    );
    assert!(
        text.contains("\n  /: the required key `format` is missing"),
        "{text}"
    );
}

#[test]
fn the_example_in_the_user_documentation_is_a_valid_record() {
    let doc = std::fs::read_to_string(repo().join("docs/noise-record.md")).unwrap();
    let start = doc.find("```json\n").unwrap() + "```json\n".len();
    let end = start + doc[start..].find("```").unwrap();
    let text = &doc[start..end];
    let value: serde_json::Value = serde_json::from_str(text).unwrap();
    assert!(validator().is_valid(&value));
    let record = parse_noise_record(text).unwrap();
    assert_eq!(record.sources.len(), 3);
    // The page's worked number: 0.004 MHz on a Pauli in a run measured in us.
    let m = record
        .expand(
            &Lattice::regular(Geometry::Square, &[2, 2], Boundary::Open).unwrap(),
            TimeUnit::Us,
        )
        .unwrap();
    assert!((m.instances[0].delta - 0.0251).abs() < 5e-5);
}

/// Runs `quassay certify` on the h5py fixture run with the record `record` copied beside it,
/// and asserts exit 1, a message naming the record's file and `pointer`, and that nothing was
/// written into the folder.
fn certify_rejects(record: &Path, pointer: &str) {
    let dir = crate::util::scratch();
    let run = dir.path().join("run.h5");
    std::fs::copy(reference("h5py/run_f32_gzip.h5"), &run).unwrap();
    let noise = dir.path().join(name(record));
    std::fs::copy(record, &noise).unwrap();
    let before = crate::util::entries(dir.path());
    let out = crate::util::quassay()
        .arg("certify")
        .arg(&run)
        .arg("--noise")
        .arg(&noise)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{}: {stderr}", name(record));
    assert!(
        stderr.contains(&name(record)),
        "{}: the message does not name the file: {stderr}",
        name(record)
    );
    assert!(
        stderr.contains(pointer),
        "{}: the message does not name {pointer}: {stderr}",
        name(record)
    );
    assert_eq!(crate::util::entries(dir.path()), before, "{}", name(record));
}

/// The user-facing side of the tables above: `certify` refuses every broken record with exit
/// code 1, the file and the JSON pointer in its message, and writes nothing.
#[test]
fn certify_refuses_every_broken_record_and_writes_nothing() {
    for (file, pointer, _) in INVALID {
        certify_rejects(&reference("noise/invalid").join(file), pointer);
    }
    for (file, pointer, _) in PARSER_ONLY {
        certify_rejects(&reference("noise/invalid-parser-only").join(file), pointer);
    }
}

/// Expansion against the run (the fixture is a 4-site chain): a listed site beyond the run's
/// sites, and `each_bond` on a run whose lattice has no bonds, each fail through `certify`.
#[test]
fn certify_refuses_records_that_do_not_fit_the_run() {
    let dir = crate::util::scratch();
    let out_of_range = dir.path().join("site-seven.json");
    let mut v: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(reference("noise/valid/minimal.json")).unwrap(),
    )
    .unwrap();
    v["sources"][0]["acts_on"] = serde_json::json!({"sites": [[1], [7]]});
    std::fs::write(&out_of_range, v.to_string()).unwrap();
    certify_rejects(&out_of_range, "/sources/0/acts_on/sites/1/0");

    // A one-site graph has no bonds.
    use quassay::model::run::{Hamiltonian, Observable, Run, Shots};
    use quassay::model::units::FrequencyUnit;
    use quassay::outputs::run_file::{write_run, WriteOptions};
    let run = Run {
        run_id: "invented-single-site".into(),
        time_unit: TimeUnit::Us,
        description: None,
        times: vec![0.0, 1.0],
        lattice: Lattice::graph(1, &[], Boundary::Open).unwrap(),
        hamiltonian: Hamiltonian {
            energy_unit: FrequencyUnit::MHz,
            bond_norm_max: 0.0,
            bond_norms: None,
            interaction_range: 1,
        },
        observables: vec![Observable {
            name: "Z_0".into(),
            values: ndarray::Array2::zeros((2, 2)),
            shots: Shots::Uniform(100),
            stderr: None,
            ideal: None,
            support: vec![0],
            spectrum_min: -1.0,
            spectrum_max: 1.0,
            description: None,
            terms: None,
            two_outcomes: false,
        }],
    };
    let bondless = dir.path().join("bondless.h5");
    write_run(&bondless, &run, &WriteOptions::default()).unwrap();
    let bonds = dir.path().join("each-bond.json");
    let mut v = serde_json::json!({
        "format": "quassay-noise", "format_version": 1, "frequency_unit": "kHz",
        "redrawn": "once",
        "sources": [{"name": "coupling", "acts_on": "each_bond", "operator_spectrum": [-1.0, 1.0],
                     "amplitude": 1.0, "distribution": {"family": "two_point"}}]
    });
    std::fs::write(&bonds, v.to_string()).unwrap();
    let before = crate::util::entries(dir.path());
    let out = crate::util::quassay()
        .args(["certify"])
        .arg(&bondless)
        .arg("--noise")
        .arg(&bonds)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(
        stderr.contains("each-bond.json") && stderr.contains("/sources/0/acts_on"),
        "{stderr}"
    );
    assert!(stderr.contains("no bonds"), "{stderr}");
    assert_eq!(crate::util::entries(dir.path()), before);
    v["sources"][0]["acts_on"] = serde_json::json!("each_site");
    std::fs::write(&bonds, v.to_string()).unwrap();
    crate::util::quassay()
        .args(["certify"])
        .arg(&bondless)
        .arg("--noise")
        .arg(&bonds)
        .assert()
        .success();
}
