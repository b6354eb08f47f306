//! Integration tests for `quassay certify` and `quassay verify`, run as a user would run them:
//! the binary on real files (the h5py fixture of `tests/reference/h5py/`, written by an HDF5
//! writer independent of quassay, and the noise records of `tests/reference/noise/`).
//!
//! Every certificate a test produces is checked by [`certified`]: it validates against
//! `schemas/certificate.schema.json` (draft 2020-12, with the `jsonschema` crate) and its
//! `digest` is the SHA-256 (FIPS 180-4) of the RFC 8785 form of its body. Numbers are checked
//! against the NumPy side file of the fixture and against the formulas of docs/method.md §3.

use std::path::{Path, PathBuf};

use quassay::certificate::canonical::to_canonical_bytes;
use quassay::certificate::hash::sha256_file;
use quassay::certificate::record::dataset_digests;
use quassay::inputs::run_file::read_run;
use quassay::outputs::run_file::{write_run, WriteOptions};
use serde_json::Value;

use crate::util::{
    certified, digest_of, entries, numbers, observable, quassay, reference, scratch,
};

// ---------------------------------------------------------------------------------------------
// Helpers

/// A fresh folder holding the h5py fixture as `run.h5` and a noise record as `noise.json`.
struct Case {
    dir: tempfile::TempDir,
}

impl Case {
    fn new(noise: &str) -> Case {
        let dir = scratch();
        std::fs::copy(reference("h5py/run_f32_gzip.h5"), dir.path().join("run.h5")).unwrap();
        std::fs::copy(
            reference("noise/valid").join(noise),
            dir.path().join("noise.json"),
        )
        .unwrap();
        Case { dir }
    }

    fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// `quassay certify run.h5 --noise noise.json ARGS`: must write a certificate (`-o` or the
    /// default `run.cert.json`) that passes [`certified`], and exit 0 if its verdict is
    /// `consistent` (or `not_tested`), 3 if it is `inconsistent` (docs/robustness.md, "Exit codes"); returns stdout.
    fn certify(&self, args: &[&str]) -> String {
        let out = quassay()
            .arg("certify")
            .arg(self.path("run.h5"))
            .arg("--noise")
            .arg(self.path("noise.json"))
            .args(args)
            .output()
            .unwrap();
        let written = match args.iter().position(|a| *a == "-o") {
            Some(i) => PathBuf::from(args[i + 1]),
            None => self.path("run.cert.json"),
        };
        let cert = certified(&written);
        let expected = match cert["body"]["verdict"]["status"].as_str() {
            Some("inconsistent") => 3,
            Some("consistent" | "not_tested") => 0,
            other => panic!("unknown verdict {other:?}"),
        };
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(expected), "{stderr}");
        String::from_utf8(out.stdout).unwrap()
    }

    /// Certifies into `name` (in the folder) and returns the checked certificate.
    fn certify_to(&self, name: &str, args: &[&str]) -> Value {
        let out = self.path(name);
        let mut all = vec!["-o", out.to_str().unwrap()];
        all.extend_from_slice(args);
        self.certify(&all);
        certified(&out)
    }
}

/// `quassay verify CERT ARGS`: asserts the exit code; returns (stdout, stderr).
fn verify(cert: &Path, args: &[&str], code: i32) -> (String, String) {
    let out = quassay()
        .arg("verify")
        .arg(cert)
        .args(args)
        .assert()
        .code(code);
    let o = out.get_output();
    let (stdout, stderr) = (
        String::from_utf8(o.stdout.clone()).unwrap(),
        String::from_utf8(o.stderr.clone()).unwrap(),
    );
    assert!(!stderr.contains("panicked"), "{stderr}");
    (stdout, stderr)
}

/// Writes `cert` back to `path`, pretty-printed as quassay does.
fn write_cert(path: &Path, cert: &Value) {
    std::fs::write(path, serde_json::to_string_pretty(cert).unwrap() + "\n").unwrap();
}

/// Writes `cert` with its digest recomputed over the (edited) body: a careful forger.
fn write_resealed(path: &Path, cert: &mut Value) {
    cert["digest"] = Value::String(digest_of(&cert["body"]));
    write_cert(path, cert);
}

// ---------------------------------------------------------------------------------------------
// A certificate, its schema and its re-verification

#[test]
fn a_certificate_is_written_beside_the_run_validates_and_verifies() {
    let c = Case::new("chain-detuning.json");
    let stdout = c.certify(&[]);
    let cert_path = c.path("run.cert.json");
    assert!(
        stdout.contains("certificate") && stdout.contains("written"),
        "{stdout}"
    );
    let cert = certified(&cert_path);
    assert_eq!(cert["digest"], Value::String(stdout_digest(&stdout)));
    // Inputs inside the certificate's folder are recorded by their relative paths.
    assert_eq!(cert["body"]["inputs"]["run"]["path"], "run.h5");
    assert_eq!(cert["body"]["inputs"]["noise_record"]["path"], "noise.json");
    let (size, sha) = sha256_file(&c.path("run.h5")).unwrap();
    assert_eq!(cert["body"]["inputs"]["run"]["size"], size);
    assert_eq!(cert["body"]["inputs"]["run"]["sha256"], sha.as_str());
    let (out, _) = verify(&cert_path, &[], 0);
    assert!(out.contains("identical, byte for byte"), "{out}");
    assert!(out.contains("verified"), "{out}");
}

/// The digest printed on the summary's first line.
fn stdout_digest(stdout: &str) -> String {
    let start = stdout.find("(digest ").unwrap() + "(digest ".len();
    stdout[start..start + 64].to_string()
}

#[test]
fn the_certificate_states_the_numbers_numpy_stored_and_hoeffdings_shot_term() {
    // Outside source: the fixture's side file, written by NumPy from the arrays h5py stored.
    let side: Value = serde_json::from_str(
        &std::fs::read_to_string(reference("h5py/run_f32_gzip.json")).unwrap(),
    )
    .unwrap();
    let c = Case::new("chain-detuning.json");
    // The model statement alone (the data statement would take half of ε).
    let cert = c.certify_to("c.json", &["--data-share", "0"]);
    let z = observable(&cert, "Z_1");
    let values: Vec<Vec<f64>> = side["observables"]["Z_1"]["values"]
        .as_array()
        .unwrap()
        .iter()
        .map(numbers)
        .collect();
    let shots: Vec<Vec<f64>> = side["observables"]["Z_1"]["shots"]
        .as_array()
        .unwrap()
        .iter()
        .map(numbers)
        .collect();
    let r = values.len() as f64;
    let mean = numbers(&z["mean"]);
    let e_shot = numbers(&z["e_shot"]);
    let times = numbers(&cert["body"]["run"]["times"]);
    assert_eq!(times, numbers(&side["times"]));
    // Simultaneous over T·K = 5·2 points, p = α = 0.05/2 (docs/method.md §3): α per point = 0.0025.
    let alpha = 0.025 / 10.0;
    let split = &cert["body"]["claim"]["probability_split"];
    assert_eq!(split["points"], 10);
    assert!((split["shot_noise_per_point"].as_f64().unwrap() - alpha).abs() < 1e-15);
    for k in 0..times.len() {
        let m: f64 = values.iter().map(|row| row[k]).sum::<f64>() / r;
        assert!((mean[k] - m).abs() <= 1e-15, "mean at {k}");
        // Hoeffding (1963): s_O √(Σ_r 1/(R² S_r)) √(ln(2/α)/2), s_O = 2 for Z.
        let inv: f64 = shots.iter().map(|row| 1.0 / row[k]).sum();
        let expected = 2.0 * (inv / (r * r)).sqrt() * (0.5 * (2.0 / alpha).ln()).sqrt();
        assert!(
            (e_shot[k] - expected).abs() <= 1e-12 * expected,
            "e_shot at {k}: {} vs {expected}",
            e_shot[k]
        );
    }
    // The interval is [mean − e_avg − e_shot, mean + e_avg + e_shot].
    let (e_avg, lower, upper) = (
        numbers(&z["e_avg"]),
        numbers(&z["lower"]),
        numbers(&z["upper"]),
    );
    for k in 0..times.len() {
        let h = e_avg[k] + e_shot[k];
        assert!((lower[k] - (mean[k] - h)).abs() < 1e-15);
        assert!((upper[k] - (mean[k] + h)).abs() < 1e-15);
    }
}

#[test]
fn certifying_the_same_inputs_twice_gives_identical_bodies_and_digests() {
    let c = Case::new("chain-detuning.json");
    let a = c.certify_to("a.cert.json", &[]);
    let b = c.certify_to("b.cert.json", &[]);
    assert_eq!(
        to_canonical_bytes(&a["body"]).unwrap(),
        to_canonical_bytes(&b["body"]).unwrap()
    );
    assert_eq!(a["digest"], b["digest"]);
    // Again into the first file, replacing it with --force.
    let a2 = c.certify_to("a.cert.json", &["--force"]);
    assert_eq!(
        to_canonical_bytes(&a["body"]).unwrap(),
        to_canonical_bytes(&a2["body"]).unwrap()
    );
    assert_eq!(a["digest"], a2["digest"]);
    verify(&c.path("a.cert.json"), &[], 0);
}

// ---------------------------------------------------------------------------------------------
// What verify detects

#[test]
fn verify_names_the_run_and_the_dataset_after_a_value_changed() {
    let c = Case::new("chain-detuning.json");
    c.certify(&[]);
    {
        let f = hdf5::File::open_rw(c.path("run.h5")).unwrap();
        let ds = f.dataset("observables/Z_1/values").unwrap();
        let mut v: ndarray::Array2<f32> = ds.read_2d().unwrap();
        v[[0, 2]] = 0.5; // inside the spectrum [-1, 1], so the run still reads
        ds.write(&v).unwrap();
    }
    let (out, _) = verify(&c.path("run.cert.json"), &[], 3);
    assert!(out.contains("FAILED: input `run`"), "{out}");
    assert!(out.contains("has changed"), "{out}");
    assert!(out.contains("/observables/Z_1/values"), "{out}");
    assert!(out.contains("not verified"), "{out}");
}

#[test]
fn verify_names_the_noise_record_after_its_amplitude_was_edited() {
    let c = Case::new("chain-detuning.json");
    c.certify(&[]);
    let path = c.path("noise.json");
    let mut rec: Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    rec["sources"][0]["amplitude"] = serde_json::json!(0.03);
    std::fs::write(&path, serde_json::to_string_pretty(&rec).unwrap()).unwrap();
    let (out, _) = verify(&c.path("run.cert.json"), &[], 3);
    assert!(
        out.contains("FAILED: input `noise_record`") && out.contains("has changed"),
        "{out}"
    );
}

#[test]
fn verify_detects_a_number_edited_in_the_body() {
    let c = Case::new("chain-detuning.json");
    c.certify(&[]);
    let path = c.path("run.cert.json");
    let mut cert = certified(&path);
    let x = cert["body"]["observables"][0]["e_avg"][2].as_f64().unwrap();
    cert["body"]["observables"][0]["e_avg"][2] = serde_json::json!(x / 2.0);
    write_cert(&path, &cert);
    let (out, _) = verify(&path, &[], 3);
    assert!(out.contains("the digest does not match the body"), "{out}");
}

#[test]
fn verify_detects_an_edited_number_even_with_the_digest_recomputed() {
    let c = Case::new("chain-detuning.json");
    c.certify(&[]);
    let path = c.path("run.cert.json");
    let mut cert = certified(&path);
    let x = cert["body"]["observables"][0]["e_avg"][2].as_f64().unwrap();
    cert["body"]["observables"][0]["e_avg"][2] = serde_json::json!(x / 2.0);
    write_resealed(&path, &mut cert);
    let (out, _) = verify(&path, &[], 3);
    assert!(
        out.contains("digest") && out.contains("matches the body"),
        "{out}"
    );
    assert!(
        out.contains("differs at /body/observables/0/e_avg/2"),
        "{out}"
    );
}

#[test]
fn verify_refuses_recorded_paths_that_leave_the_certificates_folder() {
    // The certificate and its inputs live in `sub/`; a copy of the run sits one level up, so
    // `../run.h5` would open a real file with the right bytes: only the path check can fail.
    let c = Case::new("chain-detuning.json");
    let sub = c.path("sub");
    std::fs::create_dir(&sub).unwrap();
    for f in ["run.h5", "noise.json"] {
        std::fs::copy(c.path(f), sub.join(f)).unwrap();
    }
    quassay()
        .arg("certify")
        .arg(sub.join("run.h5"))
        .arg("--noise")
        .arg(sub.join("noise.json"))
        .assert()
        .code(3); // the fixture's random values contradict any record: see the verdict test
    let path = sub.join("run.cert.json");
    let original = certified(&path);
    let absolute = sub.join("run.h5").canonicalize().unwrap();
    for (recorded, why) in [
        ("../run.h5".to_string(), "climbs out of the inputs folder"),
        (absolute.to_str().unwrap().to_string(), "is absolute"),
    ] {
        let mut cert = original.clone();
        cert["body"]["inputs"]["run"]["path"] = Value::String(recorded.clone());
        write_resealed(&path, &mut cert);
        certified(&path);
        let (out, _) = verify(&path, &[], 3);
        assert!(out.contains("FAILED: input `run`"), "{out}");
        assert!(out.contains(&recorded) && out.contains(why), "{out}");
    }
}

#[test]
fn a_repacked_run_keeps_its_content_digests_and_still_verifies() {
    let c = Case::new("chain-detuning.json");
    c.certify(&[]);
    let run_path = c.path("run.h5");
    let before = read_run(&run_path).unwrap();
    let (_, sha_before) = sha256_file(&run_path).unwrap();
    // Rewrite the same numbers as float64, contiguous, uncompressed (the fixture is float32,
    // gzip + shuffle, big-endian times).
    let tmp = c.path("repacked.h5");
    write_run(&tmp, &before, &WriteOptions::default()).unwrap();
    std::fs::rename(&tmp, &run_path).unwrap();
    let after = read_run(&run_path).unwrap();
    let (_, sha_after) = sha256_file(&run_path).unwrap();
    assert_ne!(sha_before, sha_after, "the repacked file has other bytes");
    assert_eq!(dataset_digests(&before), dataset_digests(&after));

    let cert_path = c.path("run.cert.json");
    let (out, _) = verify(&cert_path, &[], 0);
    assert!(out.contains("was repacked"), "{out}");
    assert!(out.contains(&sha_after), "{out}");
    assert!(
        out.contains("apart from /body/inputs/run/size and /body/inputs/run/sha256"),
        "{out}"
    );
    let (json, _) = verify(&cert_path, &["--json"], 0);
    let v: Value = serde_json::from_str(&json).unwrap();
    assert_eq!(v["reproduces"], true);
    assert_eq!(v["repacked"], true);

    // A repacked file with one value changed is refused, naming the dataset.
    let mut changed = before.clone();
    let o = changed
        .observables
        .iter_mut()
        .find(|o| o.name == "ZZ_mean")
        .unwrap();
    o.values[[1, 3]] = 0.0;
    write_run(&tmp, &changed, &WriteOptions::default()).unwrap();
    std::fs::rename(&tmp, &run_path).unwrap();
    let (out, _) = verify(&cert_path, &[], 3);
    assert!(out.contains("/observables/ZZ_mean/values"), "{out}");
}

#[test]
fn an_input_outside_the_folder_is_recorded_by_name_and_verified_with_inputs() {
    let c = Case::new("chain-detuning.json");
    let elsewhere = scratch();
    let cert_path = elsewhere.path().join("c.json");
    let out = c.certify(&["-o", cert_path.to_str().unwrap()]);
    assert!(out.contains("--inputs DIR"), "{out}");
    let cert = certified(&cert_path);
    assert_eq!(cert["body"]["inputs"]["run"]["path"], "run.h5");
    // Without --inputs the recorded names are looked up beside the certificate: not there.
    let (_, err) = verify(&cert_path, &[], 1);
    assert!(err.contains("run.h5"), "{err}");
    verify(&cert_path, &["--inputs", c.dir.path().to_str().unwrap()], 0);
}

// ---------------------------------------------------------------------------------------------
// Units, infinite bounds, claims

#[test]
fn the_same_noise_in_mhz_and_in_rad_per_us_gives_the_same_bounds() {
    // units-rad-per-us.json holds the amplitudes of units-mhz.json times 2π (docs/noise-record.md:
    // a cyclic frequency f is the angular frequency 2π f).
    let a = Case::new("units-mhz.json");
    let b = Case::new("units-rad-per-us.json");
    let ca = a.certify_to("c.json", &[]);
    let cb = b.certify_to("c.json", &[]);
    let close = |x: &[f64], y: &[f64], what: &str| {
        assert_eq!(x.len(), y.len());
        for (u, v) in x.iter().zip(y) {
            assert!(
                (u - v).abs() <= 1e-12 * u.abs().max(v.abs()),
                "{what}: {u} vs {v}"
            );
        }
    };
    close(
        &numbers(&ca["body"]["noise"]["sources"][0]["delta"]),
        &numbers(&cb["body"]["noise"]["sources"][0]["delta"]),
        "delta",
    );
    assert_eq!(ca["body"]["noise"]["frequency_unit"], "MHz");
    let f = ca["body"]["noise"]["to_angular_factor"].as_f64().unwrap();
    assert!((f - 2.0 * std::f64::consts::PI).abs() < 1e-15);
    for name in ["Z_1", "ZZ_mean"] {
        for q in ["e_avg", "e_wc", "e_bias", "fluctuation", "e_one", "e_shot"] {
            close(
                &numbers(&observable(&ca, name)[q]),
                &numbers(&observable(&cb, name)[q]),
                &format!("{name} {q}"),
            );
        }
    }
    close(
        &numbers(&ca["body"]["fidelity"]["f_low"]),
        &numbers(&cb["body"]["fidelity"]["f_low"]),
        "f_low",
    );
}

#[test]
fn an_unbounded_family_is_written_as_unbounded_where_the_schema_allows_it() {
    // Invented record: normal detuning (b = ∞, so no finite worst case), redrawn every shot
    // (so no fluctuation term and all of ε goes to the shot term).
    let c = Case::new("chain-detuning.json");
    let record = serde_json::json!({
        "format": "quassay-noise",
        "format_version": 1,
        "frequency_unit": "kHz",
        "redrawn": "every_shot",
        "sources": [{
            "name": "gaussian detuning (invented)",
            "acts_on": "each_site",
            "operator_spectrum": [-1.0, 1.0],
            "amplitude": 3.0,
            "distribution": { "family": "normal", "sigma": 1.0 }
        }]
    });
    std::fs::write(c.path("noise.json"), record.to_string()).unwrap();
    let cert = c.certify_to("c.json", &[]);
    let b = &cert["body"];
    assert_eq!(b["noise"]["sources"][0]["constants"]["b"], "unbounded");
    assert_eq!(b["noise"]["sources"][0]["constants"]["width"], "unbounded");
    assert_eq!(b["claim"]["probability_split"]["rule"], "all_to_shots");
    let z = observable(&cert, "Z_1");
    // Regression: at t = 0 nothing has acted, so the worst cases are 0 there (not 0·∞ = NaN,
    // which was once written as "undefined"); from the first t > 0 on they are unbounded.
    assert_eq!(b["run"]["times"][0], 0.0);
    assert_eq!(z["e_wc"][0], 0.0);
    assert_eq!(b["fidelity"]["d_wc"][0], 0.0);
    assert_eq!(b["fidelity"]["f_low"][0], 1.0);
    for k in 0..5 {
        if k > 0 {
            assert_eq!(z["e_wc"][k], "unbounded");
            assert_eq!(b["fidelity"]["d_wc"][k], "unbounded");
        }
        assert_eq!(z["fluctuation"][k], 0.0);
        assert_eq!(z["fluctuation_route"][k], Value::Null);
        assert_eq!(z["fluctuation_single_route"][k], "gaussian");
    }
    verify(&c.path("c.json"), &[], 0);
}

#[test]
fn claims_name_the_probability_and_the_observable_and_pointwise_says_so() {
    let c = Case::new("chain-detuning.json");
    let cert = c.certify_to("sim.json", &["--confidence", "0.9"]);
    let claims = cert["body"]["claim"]["per_observable"].as_array().unwrap();
    assert_eq!(claims.len(), 2);
    for cl in claims {
        let name = cl["observable"].as_str().unwrap();
        let text = cl["text"].as_str().unwrap();
        assert!(text.contains("with probability at least 0.9,"), "{text}");
        assert!(
            text.contains(&format!("ideal-model value of {name} ")),
            "{text}"
        );
        assert!(text.contains("at every recorded time"), "{text}");
    }
    assert_eq!(cert["body"]["claim"]["statement"], "simultaneous");

    let pw = c.certify_to("pw.json", &["--pointwise"]);
    assert_eq!(pw["body"]["claim"]["statement"], "pointwise");
    assert_eq!(pw["body"]["options"]["statement"], "pointwise");
    assert_eq!(
        pw["body"]["claim"]["probability_split"]["correction"],
        "none (pointwise)"
    );
    for cl in pw["body"]["claim"]["per_observable"].as_array().unwrap() {
        let text = cl["text"].as_str().unwrap();
        assert!(text.contains("at each recorded time separately"), "{text}");
        assert!(text.contains("with probability at least 0.95,"), "{text}");
        assert!(text.contains("not simultaneous"), "{text}");
        assert!(text.contains(cl["observable"].as_str().unwrap()), "{text}");
    }
    // Pointwise gives each point all of p: smaller intervals than the simultaneous claim.
    let sim = c.certify_to("sim95.json", &[]);
    let (s, p) = (
        numbers(&observable(&sim, "Z_1")["e_shot"]),
        numbers(&observable(&pw, "Z_1")["e_shot"]),
    );
    assert!(s.iter().zip(&p).all(|(s, p)| p < s));
    verify(&c.path("pw.json"), &[], 0);
}

#[test]
fn the_json_summaries_of_certify_and_verify_have_their_documented_fields() {
    let c = Case::new("chain-detuning.json");
    let out = c.certify(&["--json"]);
    let v: Value = serde_json::from_str(&out).unwrap();
    let cert = certified(&c.path("run.cert.json"));
    assert_eq!(v["digest"], cert["digest"]);
    assert!(v["certificate"]
        .as_str()
        .unwrap()
        .ends_with("run.cert.json"));
    assert_eq!(v["time_unit"], "us");
    assert_eq!(v["verdict"], cert["body"]["verdict"]["status"]);
    assert!(v["notes"].as_array().unwrap().is_empty());
    assert!(v["fidelity_last_time"]["f_low"].is_number());
    assert_eq!(v["fidelity_last_time"]["vacuous"], false);
    let rows = v["observables"].as_array().unwrap();
    assert_eq!(rows.len(), 2);
    for row in rows {
        let o = observable(&cert, row["name"].as_str().unwrap());
        let times = numbers(&cert["body"]["run"]["times"]);
        let k = times
            .iter()
            .position(|&t| t == row["worst_time"].as_f64().unwrap())
            .unwrap();
        assert_eq!(row["e_avg"], o["e_avg"][k]);
        assert_eq!(row["e_shot"], o["e_shot"][k]);
        assert_eq!(row["e_wc"], o["e_wc"][k]);
        let gain = row["gain"].as_f64().unwrap();
        let expected = o["e_wc"][k].as_f64().unwrap() / o["e_avg"][k].as_f64().unwrap();
        assert!((gain - expected).abs() <= 1e-15 * expected);
    }
    let (out, _) = verify(&c.path("run.cert.json"), &["--json"], 0);
    let r: Value = serde_json::from_str(&out).unwrap();
    assert_eq!(r["reproduces"], true);
    assert_eq!(r["repacked"], false);
    assert!(r["certificate"]
        .as_str()
        .unwrap()
        .ends_with("run.cert.json"));
    assert!(r["steps"].as_array().unwrap().len() >= 4);
}

// ---------------------------------------------------------------------------------------------
// Exit codes and messages; nothing written on failure

#[test]
fn a_missing_run_exits_1_naming_it_and_writes_nothing() {
    let c = Case::new("chain-detuning.json");
    let before = entries(c.dir.path());
    let out = quassay()
        .arg("certify")
        .arg(c.path("absent.h5"))
        .arg("--noise")
        .arg(c.path("noise.json"))
        .assert()
        .code(1);
    let err = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert!(err.contains("absent.h5"), "{err}");
    assert_eq!(entries(c.dir.path()), before);
}

#[test]
fn a_bad_noise_record_exits_1_with_its_json_pointer_and_writes_nothing() {
    let c = Case::new("chain-detuning.json");
    std::fs::copy(
        reference("noise/invalid/negative-amplitude.json"),
        c.path("noise.json"),
    )
    .unwrap();
    let before = entries(c.dir.path());
    let out = quassay()
        .arg("certify")
        .arg(c.path("run.h5"))
        .arg("--noise")
        .arg(c.path("noise.json"))
        .assert()
        .code(1);
    let err = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert!(err.contains("noise.json"), "{err}");
    assert!(err.contains("/sources/0/amplitude"), "{err}");
    assert_eq!(entries(c.dir.path()), before);
}

#[test]
fn a_confidence_outside_0_1_is_a_usage_error() {
    let c = Case::new("chain-detuning.json");
    let before = entries(c.dir.path());
    let out = quassay()
        .arg("certify")
        .arg(c.path("run.h5"))
        .arg("--noise")
        .arg(c.path("noise.json"))
        .args(["--confidence", "1.5"])
        .assert()
        .code(2);
    let err = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert!(err.contains("1.5") && err.contains("--confidence"), "{err}");
    assert_eq!(entries(c.dir.path()), before);
}

#[test]
fn an_existing_certificate_is_not_replaced_without_force() {
    let c = Case::new("chain-detuning.json");
    c.certify(&[]);
    let path = c.path("run.cert.json");
    let bytes = std::fs::read(&path).unwrap();
    let before = entries(c.dir.path());
    let out = quassay()
        .arg("certify")
        .arg(c.path("run.h5"))
        .arg("--noise")
        .arg(c.path("noise.json"))
        .args(["--confidence", "0.99"])
        .assert()
        .code(1);
    let err = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    assert!(
        err.contains("run.cert.json") && err.contains("--force"),
        "{err}"
    );
    assert_eq!(std::fs::read(&path).unwrap(), bytes);
    assert_eq!(entries(c.dir.path()), before);
}

#[test]
fn verify_refuses_a_file_that_is_not_a_certificate_with_exit_1() {
    let c = Case::new("chain-detuning.json");
    c.certify(&[]);
    let path = c.path("run.cert.json");
    let mut cert = certified(&path);
    cert["format"] = serde_json::json!("quassay-noise");
    write_cert(&path, &cert);
    let (_, err) = verify(&path, &[], 1);
    assert!(
        err.contains("run.cert.json") && err.contains("/format"),
        "{err}"
    );
    // A noise record given to verify by mistake is refused the same way.
    let (_, err) = verify(&c.path("noise.json"), &[], 1);
    assert!(
        err.contains("/format") && err.contains("not a quassay certificate"),
        "{err}"
    );
}

/// The h5py fixture holds random numbers (NumPy's generator), not a physical run: their spread
/// between realizations at t = 0, where no noise has acted, is far above the shot noise its
/// counts and standard errors allow. certify must write the certificate all the same, exit 3,
/// put the verdict into every claim, and flag t = 0 as a preparation or measurement problem.
#[test]
fn data_that_contradict_the_record_exit_3_and_the_claim_says_so() {
    let c = Case::new("chain-detuning.json");
    let stdout = c.certify(&[]);
    let cert = certified(&c.path("run.cert.json"));
    let v = &cert["body"]["verdict"];
    assert_eq!(v["status"], "inconsistent");
    assert!(v["failed_at_time_zero"].as_u64().unwrap() >= 1, "{v}");
    // checks.failures: per observable and test, the failed time indices; each one's adjusted
    // p-value (in checks.observables) is at most the check level.
    let checks = &cert["body"]["checks"];
    let groups = checks["failures"].as_array().unwrap();
    assert!(groups
        .iter()
        .any(|g| g["category"] == "preparation_or_measurement"
            && g["time_indices"].as_array().unwrap().contains(&0.into())));
    let mut named = 0;
    for g in groups {
        let o = checks["observables"]
            .as_array()
            .unwrap()
            .iter()
            .find(|o| o["name"] == g["observable"])
            .unwrap();
        let p = &o[g["test"].as_str().unwrap()]["adjusted_p_value"];
        for i in g["time_indices"].as_array().unwrap() {
            let i = i.as_u64().unwrap() as usize;
            assert!(p[i].as_f64().unwrap() <= 0.01, "{g}");
            named += 1;
        }
    }
    assert_eq!(named, v["failed_tests"].as_u64().unwrap());
    for cl in cert["body"]["claim"]["per_observable"].as_array().unwrap() {
        assert!(cl["text"]
            .as_str()
            .unwrap()
            .starts_with("The data contradict the noise record"));
    }
    assert!(stdout.contains("consistency of the data with the noise record: inconsistent"));
    assert!(
        stdout.contains("Z_1: fails from t = 0 us; implied noise scale"),
        "{stdout}"
    );
}

/// The bundled example (simulated with the declared noise) passes its checks: exit 0.
#[test]
fn the_bundled_chain_example_is_consistent_with_its_record() {
    let dir = scratch();
    for f in ["run.h5", "noise.json"] {
        std::fs::copy(
            crate::util::repo().join("example_runs/chain12").join(f),
            dir.path().join(f),
        )
        .unwrap();
    }
    quassay()
        .arg("certify")
        .arg(dir.path().join("run.h5"))
        .arg("--noise")
        .arg(dir.path().join("noise.json"))
        .assert()
        .code(0);
    let cert = certified(&dir.path().join("run.cert.json"));
    assert_eq!(cert["body"]["verdict"]["status"], "consistent");
    assert!(cert["body"]["verdict"]["tests"].as_u64().unwrap() > 100);
}

/// The envelope of a certificate attached to a public dataset discloses neither the machine
/// nor its folders (issue "a lab's own data"): certified from absolute paths, the whole file
/// holds neither the host name nor the scratch directory; `--full-envelope` records both.
#[test]
fn the_default_envelope_holds_no_host_name_and_no_directory() {
    let c = Case::new("chain-detuning.json");
    let dir = c.dir.path().canonicalize().unwrap();
    let host = std::fs::read_to_string("/etc/hostname")
        .map(|s| s.trim().to_owned())
        .unwrap_or_default();
    let private = c.path("private.cert.json");
    c.certify(&["-o", private.to_str().unwrap()]);
    let text = std::fs::read_to_string(&private).unwrap();
    let folder = dir.to_str().unwrap();
    for f in [folder, c.dir.path().to_str().unwrap()] {
        assert!(!text.contains(f), "the folder {f} is in the certificate");
    }
    let cert: Value = serde_json::from_str(&text).unwrap();
    assert!(cert["envelope"].get("host").is_none());
    if host.len() >= 3 {
        // A short host name could occur by chance (in a digest, say): only longer ones count.
        assert!(
            !text.contains(&format!("\"{host}\"")),
            "the host name is in the certificate"
        );
    }
    let full = c.path("full.cert.json");
    c.certify(&["-o", full.to_str().unwrap(), "--full-envelope"]);
    let cert: Value = serde_json::from_str(&std::fs::read_to_string(&full).unwrap()).unwrap();
    assert!(cert["envelope"]["host"].is_string());
    let line = cert["envelope"]["command_line"].to_string();
    assert!(line.contains(c.dir.path().to_str().unwrap()), "{line}");
}

/// The summary table says `vacuous` where a bound reaches the observable's range (the bundled
/// example with every amplitude × 50, so that at the worst time both E_avg and the worst case
/// reach the spread 2) instead of printing the number, and names where the full precision is.
#[test]
fn the_summary_says_vacuous_where_a_bound_reaches_the_range() {
    let dir = crate::util::scratch();
    let example = crate::util::repo().join("example_runs/chain12");
    std::fs::copy(example.join("run.h5"), dir.path().join("run.h5")).unwrap();
    let text = std::fs::read_to_string(example.join("noise.json")).unwrap();
    let mut record: Value = serde_json::from_str(&text).unwrap();
    for s in record["sources"].as_array_mut().unwrap() {
        s["amplitude"] = serde_json::json!(s["amplitude"].as_f64().unwrap() * 50.0);
    }
    std::fs::write(dir.path().join("noise.json"), record.to_string()).unwrap();
    let out = crate::util::quassay()
        .arg("certify")
        .arg(dir.path().join("run.h5"))
        .arg("--noise")
        .arg(dir.path().join("noise.json"))
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    let body = crate::util::body(&dir.path().join("run.cert.json"));
    let o = &body["observables"][0];
    let last = crate::util::numbers(&o["e_wc"]).last().copied().unwrap();
    assert!(last >= o["spread"].as_f64().unwrap(), "{last}");
    let row = text
        .lines()
        .find(|l| l.starts_with(o["name"].as_str().unwrap()))
        .unwrap();
    assert!(row.contains("vacuous"), "{row}");
    assert!(
        text.contains("Full precision: the certificate and --json"),
        "{text}"
    );
}
