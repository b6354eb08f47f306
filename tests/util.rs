//! Shared helpers for the integration tests: a fresh folder per test, the binary, the repo.

#![allow(dead_code)]

use std::path::{Path, PathBuf};

use serde_json::{json, Value};

/// The repository root (where Cargo.toml is).
pub fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A file under `tests/reference/`.
pub fn reference(rel: &str) -> PathBuf {
    repo().join("tests").join("reference").join(rel)
}

/// A fresh temporary folder, removed when dropped.
pub fn scratch() -> tempfile::TempDir {
    tempfile::tempdir().expect("temporary folder")
}

/// The `quassay` binary, ready to be given arguments.
pub fn quassay() -> assert_cmd::Command {
    assert_cmd::Command::cargo_bin("quassay").expect("the quassay binary is built")
}

/// Names of the entries of a folder, sorted.
pub fn entries(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}

// ---------------------------------------------------------------------------------------------
// Certificates and simulator truth, shared by the certify, light-cone and sums tests.

/// The certificate schema (`schemas/certificate.schema.json`), compiled once; the schema must
/// itself be a valid draft 2020-12 schema.
pub fn certificate_validator() -> &'static jsonschema::Validator {
    static V: std::sync::OnceLock<jsonschema::Validator> = std::sync::OnceLock::new();
    V.get_or_init(|| {
        let text = std::fs::read_to_string(repo().join("schemas/certificate.schema.json")).unwrap();
        let schema: serde_json::Value = serde_json::from_str(&text).unwrap();
        assert!(jsonschema::meta::is_valid(&schema));
        jsonschema::draft202012::new(&schema).unwrap()
    })
}

/// SHA-256 (FIPS 180-4) of the RFC 8785 form of `body`, from the library's canonicaliser
/// (itself tested against the RFC 8785 examples).
pub fn digest_of(body: &serde_json::Value) -> String {
    quassay::certificate::hash::sha256_hex(
        &quassay::certificate::canonical::to_canonical_bytes(body).unwrap(),
    )
}

/// Reads a certificate that a test produced, asserts that it validates against the schema and
/// that its digest is the digest of its body, and returns it. Every certifying test calls this.
pub fn certified(path: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(path).unwrap();
    let cert: serde_json::Value = serde_json::from_str(&text).unwrap();
    let errors: Vec<String> = certificate_validator()
        .iter_errors(&cert)
        .map(|e| format!("{} at {}", e, e.instance_path))
        .collect();
    assert!(
        errors.is_empty(),
        "{} does not validate against the schema:\n{}",
        path.display(),
        errors.join("\n")
    );
    assert_eq!(
        cert["digest"].as_str().unwrap(),
        digest_of(&cert["body"]),
        "{}: the digest is not that of the body",
        path.display()
    );
    cert
}

/// The body of the certificate at `cert`, as JSON (read only: no schema or digest check, see
/// [`certified`] for that).
pub fn body(cert: &Path) -> serde_json::Value {
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(cert).unwrap()).unwrap();
    v["body"].clone()
}

/// A column of numbers of a certificate body.
pub fn numbers(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap_or_else(|| panic!("not a column: {v}"))
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

/// A column of strings of a certificate body.
pub fn strings(v: &serde_json::Value) -> Vec<&str> {
    v.as_array()
        .unwrap_or_else(|| panic!("not an array: {v}"))
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect()
}

/// The member of `body.observables` named `name`.
pub fn observable<'a>(cert: &'a serde_json::Value, name: &str) -> &'a serde_json::Value {
    cert["body"]["observables"]
        .as_array()
        .unwrap()
        .iter()
        .find(|o| o["name"] == name)
        .unwrap_or_else(|| panic!("no observable {name}"))
}

/// A dataset of `truth.h5` in `dir` (written by the simulator, read with the hdf5 library).
pub fn truth(dir: &Path, path: &str) -> ndarray::ArrayD<f64> {
    let f = hdf5::File::open(dir.join("truth.h5")).unwrap();
    f.dataset(path).unwrap().read_dyn::<f64>().unwrap()
}

/// Asserts the certificate's observable `o` (named `name`) against the exact simulation in
/// `dir`'s `truth.h5` at every time: the certified interval contains the ideal value (a
/// statement of probability ≥ the confidence for all points together; fixed seed), the worst
/// case `e_wc` holds for every draw (probability 1), and the noise average of the realizations
/// (no shot noise) is within `e_avg`, all up to the simulation's tolerance `tol`.
pub fn assert_holds_on_exact_simulation(
    dir: &Path,
    name: &str,
    o: &serde_json::Value,
    times: &[f64],
    e_avg: &[f64],
    tol: f64,
) {
    let ideal = truth(dir, &format!("observables/{name}/ideal"));
    let exact = truth(dir, &format!("observables/{name}/exact")); // R × T
    let (lower, upper) = (numbers(&o["lower"]), numbers(&o["upper"]));
    let e_wc = numbers(&o["e_wc"]);
    for (k, &t) in times.iter().enumerate() {
        let id = ideal[[k]];
        assert!(
            lower[k] <= id && id <= upper[k],
            "{name} t={t}: ideal {id} outside [{}, {}]",
            lower[k],
            upper[k]
        );
        let col = exact.index_axis(ndarray::Axis(1), k);
        for &x in col.iter() {
            assert!(
                (x - id).abs() <= e_wc[k] + tol,
                "{name} t={t}: |{x} - {id}| > e_wc {}",
                e_wc[k]
            );
        }
        let mean = col.iter().sum::<f64>() / col.len() as f64;
        assert!((mean - id).abs() <= e_avg[k] + tol, "{name} t={t}");
    }
}

// ---------------------------------------------------------------------------------------------
// Simulated inputs and `quassay certify` on them, shared by the rehearsal and data-statement tests.

/// Simulates `s` with `seed` and writes `run.h5` and `noise.json` (the declared record) into
/// `dir`, replacing what is there.
pub fn write_inputs(s: &quassay::inputs::scenario::Scenario, seed: u64, dir: &Path) {
    let sim = quassay::simulate::run::simulate(s, seed);
    quassay::outputs::run_file::write_run(
        &dir.join("run.h5"),
        &sim.run,
        &quassay::outputs::run_file::WriteOptions::default(),
    )
    .unwrap();
    std::fs::write(
        dir.join("noise.json"),
        quassay::outputs::noise_record::to_json_string(&s.noise),
    )
    .unwrap();
}

/// The command `quassay certify DIR/run.h5 --noise DIR/noise.json -o DIR/NAME`.
pub fn certify_command(dir: &Path, name: &str) -> assert_cmd::Command {
    let mut c = quassay();
    c.arg("certify")
        .arg(dir.join("run.h5"))
        .arg("--noise")
        .arg(dir.join("noise.json"))
        .arg("-o")
        .arg(dir.join(name));
    c
}

/// [`certify_command`] with `args`, asserting exit `code`; the certificate it wrote (not
/// checked against the schema: see [`certified`] for that).
pub fn certify_in(dir: &Path, name: &str, args: &[&str], code: i32) -> Value {
    certify_command(dir, name).args(args).assert().code(code);
    serde_json::from_str(&std::fs::read_to_string(dir.join(name)).unwrap()).unwrap()
}

// ---------------------------------------------------------------------------------------------
// Invented scenarios and the binomial law, shared by the exact-simulation tests (bounds_exact,
// data_statement).

/// An invented scenario (docs/scenario.md): times 0 to 1.5 in 6 steps and a fixed seed, which
/// callers may replace.
#[allow(clippy::too_many_arguments)]
pub fn scenario(
    run_id: &str,
    lattice: Value,
    hamiltonian: Value,
    initial_state: Value,
    observables: Value,
    redrawn: &str,
    sources: Value,
    realizations: usize,
    shots: u64,
) -> Value {
    json!({
        "format": "quassay-scenario", "format_version": 1,
        "run_id": run_id,
        "description": "Invented scenario for the exact-simulation tests of the bounds",
        "time_unit": "us", "energy_unit": "rad/us",
        "lattice": lattice,
        "hamiltonian": hamiltonian,
        "initial_state": initial_state,
        "times": {"start": 0.0, "stop": 1.5, "count": 6},
        "observables": observables,
        "realizations": realizations, "shots": shots, "seed": 20_261_207u64,
        "noise": {
            "format": "quassay-noise", "format_version": 1,
            "frequency_unit": "rad/us", "redrawn": redrawn,
            "sources": sources,
            "calibration": {"method": "invented", "notes": "invented record for tests"}
        }
    })
}

/// A declared noise source of a scenario (zero mean offset, known exactly).
pub fn source(name: &str, acts_on: &str, op: &str, amplitude: f64, dist: Value) -> Value {
    json!({"name": name, "acts_on": acts_on, "operator": op, "amplitude": amplitude,
           "distribution": dist, "mean_offset": 0.0, "mean_offset_uncertainty": 0.0})
}

/// The smallest `k` with `P(Bin(n, p) ≥ k) ≤ level`: a count of `k` or more successes rejects
/// `P(success) ≤ p` at that level. The upper tail is summed exactly from the pmf, computed in
/// log space by the recursion `pmf(j+1) = pmf(j) (n−j)/(j+1) · p/(1−p)`, from the top down.
pub fn binomial_critical(n: u64, p: f64, level: f64) -> u64 {
    if p >= 1.0 {
        return n + 1;
    }
    let mut ln_pmf = vec![0.0; n as usize + 1];
    ln_pmf[0] = n as f64 * (1.0 - p).ln();
    let odds = (p / (1.0 - p)).ln();
    for j in 0..n as usize {
        ln_pmf[j + 1] = ln_pmf[j] + ((n as usize - j) as f64 / (j + 1) as f64).ln() + odds;
    }
    let mut tail = 0.0;
    for k in (0..=n as usize).rev() {
        tail += ln_pmf[k].exp();
        if tail > level {
            return k as u64 + 1;
        }
    }
    0
}

// ---------------------------------------------------------------------------------------------
// Python with NumPy and h5py, for the recipes of the docs and the README that CI runs.

/// Whether `python3` imports every module of `modules`. In CI (`CI` set; `.ci/run` installs
/// NumPy and h5py) a missing module FAILS the calling test; locally it is skipped with a note.
pub fn python_has(modules: &[&str]) -> bool {
    let code = format!("import {}", modules.join(", "));
    let ok = std::process::Command::new("python3")
        .args(["-c", &code])
        .output()
        .is_ok_and(|o| o.status.success());
    if !ok {
        assert!(
            std::env::var_os("CI").is_none(),
            "python3 with {modules:?} is missing; CI must install it (.ci/run)"
        );
        eprintln!("skipped: python3 with {modules:?} is not available and CI is unset");
    }
    ok
}

/// The first fenced code block of kind `lang` after the heading `heading` in the file `rel`
/// (relative to the repository).
pub fn doc_block(rel: &str, heading: &str, lang: &str) -> String {
    let text = std::fs::read_to_string(repo().join(rel)).unwrap();
    let after = text
        .split_once(heading)
        .unwrap_or_else(|| panic!("{rel} has no heading {heading}"))
        .1;
    let fence = format!("```{lang}\n");
    let start = after
        .find(&fence)
        .unwrap_or_else(|| panic!("{rel}: no {lang} block after {heading}"));
    let body = &after[start + fence.len()..];
    body[..body.find("```").unwrap()].to_string()
}
