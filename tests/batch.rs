//! Integration tests for `quassay certify` on several runs and folders (docs/batch.md), run as a
//! user would: the binary on the bundled example runs (invented scenarios, `example_runs/`) and
//! the h5py fixture (`tests/reference/h5py/`, written by an HDF5 writer independent of
//! quassay), copied to scratch folders.
//!
//! Every certificate is checked by [`certified`]: it validates against the schema and its
//! digest is the SHA-256 (FIPS 180-4) of the RFC 8785 form of its body. A batch certificate
//! must also have the very body (and so the digest) of the same run certified alone.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::util::{certified, entries, quassay, reference, repo, scratch};

/// Copies `example_runs/<example>/<file>` to `dir/<name>`.
fn copy_example(example: &str, file: &str, dir: &Path, name: &str) {
    std::fs::create_dir_all(dir).unwrap();
    std::fs::copy(
        repo().join("example_runs").join(example).join(file),
        dir.join(name),
    )
    .unwrap();
}

/// A folder with the 12-site chain as `run.h5` (record `noise.json`), the 3 × 4 square as
/// `sq.h5` (record `sq.noise.json`) and the chain's simulator truth `truth.h5`.
fn two_runs(dir: &Path) {
    copy_example("chain12", "run.h5", dir, "run.h5");
    copy_example("chain12", "noise.json", dir, "noise.json");
    copy_example("chain12", "truth.h5", dir, "truth.h5");
    copy_example("square3x4", "run.h5", dir, "sq.h5");
    copy_example("square3x4", "noise.json", dir, "sq.noise.json");
}

/// A folder with the h5py fixture as `fix.h5` and a record it contradicts (its random values
/// fail the consistency checks, as tests/certify.rs shows for the same pair).
fn inconsistent_run(dir: &Path) -> PathBuf {
    std::fs::create_dir_all(dir).unwrap();
    std::fs::copy(reference("h5py/run_f32_gzip.h5"), dir.join("fix.h5")).unwrap();
    std::fs::copy(
        reference("noise/valid/chain-detuning.json"),
        dir.join("noise.json"),
    )
    .unwrap();
    dir.join("fix.h5")
}

/// `quassay certify ARGS`; asserts the exit code and that nothing panicked; (stdout, stderr).
fn certify(args: &[&Path], extra: &[&str], code: i32) -> (String, String) {
    let out = quassay()
        .arg("certify")
        .args(args)
        .args(extra)
        .output()
        .unwrap();
    let (stdout, stderr) = (
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    );
    assert_eq!(out.status.code(), Some(code), "{stdout}\n{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    (stdout, stderr)
}

/// The `--json` summary's entries as (run, outcome).
fn outcomes(json: &str) -> Vec<(String, String)> {
    let v: Value = serde_json::from_str(json).unwrap();
    v["runs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            (
                r["run"].as_str().unwrap().to_string(),
                r["outcome"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

fn s(p: &Path) -> String {
    p.display().to_string()
}

#[test]
fn a_folder_gives_one_certificate_per_run_with_the_body_of_certifying_it_alone() {
    let d = scratch();
    let batch = d.path().join("batch");
    two_runs(&batch);
    let (stdout, _) = certify(&[&batch], &["--reports"], 0);
    // One line per .h5, sorted by name; the truth file is listed as skipped.
    let lines: Vec<&str> = stdout.lines().collect();
    let at = |name: &str| {
        lines
            .iter()
            .position(|l| l.contains(&s(&batch.join(name))))
            .unwrap_or_else(|| panic!("no line for {name}:\n{stdout}"))
    };
    assert!(
        at("run.h5") < at("sq.h5") && at("sq.h5") < at("truth.h5"),
        "{stdout}"
    );
    assert!(lines[at("run.h5")].contains("certified"), "{stdout}");
    assert!(lines[at("truth.h5")].contains("skipped"), "{stdout}");
    assert!(stdout.contains("2 certified"), "{stdout}");

    let alone = d.path().join("alone");
    two_runs(&alone);
    for (run, noise, cert) in [
        ("run.h5", "noise.json", "run.cert.json"),
        ("sq.h5", "sq.noise.json", "sq.cert.json"),
    ] {
        let noise = alone.join(noise);
        certify(&[&alone.join(run), Path::new("--noise"), &noise], &[], 0);
        let a = certified(&batch.join(cert));
        let b = certified(&alone.join(cert));
        assert_eq!(a["body"], b["body"], "{cert}: the batch body differs");
        assert_eq!(a["digest"], b["digest"]);
        // The table shows the certificate's path and its largest E_avg.
        let max_e_avg = a["body"]["observables"]
            .as_array()
            .unwrap()
            .iter()
            .flat_map(|o| o["e_avg"].as_array().unwrap().clone())
            .map(|x| x.as_f64().unwrap())
            .fold(0.0, f64::max);
        assert!(max_e_avg > 0.0);
        assert!(stdout.contains(&s(&batch.join(cert))), "{stdout}");
    }
    let html = std::fs::read_to_string(batch.join("sq.report.html")).unwrap();
    assert!(html.to_ascii_lowercase().starts_with("<!doctype html"));
    assert_eq!(
        entries(&batch),
        [
            "noise.json",
            "run.cert.json",
            "run.h5",
            "run.report.html",
            "sq.cert.json",
            "sq.h5",
            "sq.noise.json",
            "sq.report.html",
            "truth.h5"
        ]
    );
}

#[test]
fn a_broken_run_or_a_missing_record_fails_its_line_while_the_others_are_certified() {
    let d = scratch();
    let good = d.path().join("good");
    copy_example("chain12", "run.h5", &good, "run.h5");
    copy_example("chain12", "noise.json", &good, "noise.json");
    // Not HDF5 at all, in a folder that has a record.
    std::fs::write(good.join("broken.h5"), b"this is not an HDF5 file\n").unwrap();
    // A valid run with no record beside it.
    let lone = d.path().join("lone");
    copy_example("chain12", "run.h5", &lone, "orphan.h5");
    let (stdout, stderr) = certify(&[&good, &lone.join("orphan.h5")], &["--json"], 1);
    assert_eq!(
        outcomes(&stdout),
        [
            (s(&good.join("broken.h5")), "failed".to_string()),
            (s(&good.join("run.h5")), "certified".to_string()),
            (s(&lone.join("orphan.h5")), "failed".to_string()),
        ]
    );
    let v: Value = serde_json::from_str(&stdout).unwrap();
    assert_eq!(v["exit_code"], 1);
    assert_eq!(v["runs"][0]["problems"][0]["path"], "/");
    assert_eq!(v["runs"][2]["reason"], "no noise record");
    // The reasons name the file and the fix.
    assert!(
        stderr.contains("broken.h5") && stderr.contains("HDF5"),
        "{stderr}"
    );
    assert!(
        stderr.contains("orphan.noise.json") && stderr.contains("--noise"),
        "{stderr}"
    );
    certified(&good.join("run.cert.json"));
    assert_eq!(
        entries(&good),
        ["broken.h5", "noise.json", "run.cert.json", "run.h5"]
    );
    assert_eq!(entries(&lone), ["orphan.h5"]);
}

#[test]
fn an_inconsistent_run_gives_exit_3_the_order_follows_the_inputs_and_nothing_is_overwritten() {
    let d = scratch();
    let chain = d.path().join("chain");
    copy_example("chain12", "run.h5", &chain, "run.h5");
    copy_example("chain12", "noise.json", &chain, "noise.json");
    let chain_run = chain.join("run.h5");
    let fix = inconsistent_run(&d.path().join("fix"));
    let (stdout, _) = certify(&[&chain_run, &fix], &["--json"], 3);
    assert_eq!(
        outcomes(&stdout),
        [
            (s(&chain_run), "certified".to_string()),
            (s(&fix), "inconsistent".to_string())
        ]
    );
    let cert = certified(&d.path().join("fix/fix.cert.json"));
    assert_eq!(cert["body"]["verdict"]["status"], "inconsistent");
    let kept = std::fs::read(chain.join("run.cert.json")).unwrap();

    // Again in the other order, one certificate removed: the other is not overwritten (its line
    // fails, exit 1), the removed one is written again; the table follows the new order.
    std::fs::remove_file(d.path().join("fix/fix.cert.json")).unwrap();
    let (stdout, stderr) = certify(&[&fix, &chain_run], &[], 1);
    let fix_line = stdout.lines().position(|l| l.contains(&s(&fix))).unwrap();
    let chain_line = stdout
        .lines()
        .position(|l| l.contains(&s(&chain_run)))
        .unwrap();
    assert!(fix_line < chain_line, "{stdout}");
    assert!(stdout.contains("inconsistent with record"), "{stdout}");
    assert!(stderr.contains("--force"), "{stderr}");
    assert_eq!(std::fs::read(chain.join("run.cert.json")).unwrap(), kept);
    certified(&d.path().join("fix/fix.cert.json"));

    // With --force both are written; the worst outcome is then the inconsistent run's.
    certify(&[&fix, &chain_run], &["--force"], 3);
    assert_ne!(std::fs::read(chain.join("run.cert.json")).unwrap(), kept);
    certified(&chain.join("run.cert.json"));
}

#[test]
fn one_output_name_for_several_runs_or_a_run_given_twice_is_a_usage_error() {
    let d = scratch();
    let dir = d.path().join("runs");
    two_runs(&dir);
    let before = entries(&dir);
    let (run, sq) = (dir.join("run.h5"), dir.join("sq.h5"));
    let (run, sq, folder) = (run.as_path(), sq.as_path(), dir.as_path());
    let out = d.path().join("c.json");
    let html = d.path().join("r.html");
    let o = ["-o", out.to_str().unwrap()];
    let r = ["--report", html.to_str().unwrap()];
    for (paths, extra) in [
        (vec![run, sq], &o[..]),
        (vec![folder], &o[..]),
        (vec![folder], &r[..]),
        (vec![run, folder], &[][..]),
    ] {
        let (_, stderr) = certify(&paths, extra, 2);
        assert!(
            stderr.contains("RUN.cert.json")
                || stderr.contains("--reports")
                || stderr.contains("given twice"),
            "{stderr}"
        );
    }
    assert_eq!(entries(&dir), before);
    assert_eq!(entries(d.path()), ["runs"]);
}

#[test]
fn a_single_run_without_noise_uses_the_record_beside_it() {
    let d = scratch();
    copy_example("chain12", "run.h5", d.path(), "run.h5");
    copy_example("chain12", "noise.json", d.path(), "noise.json");
    let noise = d.path().join("noise.json");
    let (stdout, _) = certify(&[&d.path().join("run.h5")], &[], 0);
    assert!(stdout.starts_with("certificate "), "{stdout}");
    let beside = certified(&d.path().join("run.cert.json"));
    let given = d.path().join("given.cert.json");
    certify(
        &[&d.path().join("run.h5"), Path::new("--noise"), &noise],
        &["-o", given.to_str().unwrap()],
        0,
    );
    assert_eq!(beside["body"], certified(&given)["body"]);
    // Without a record anywhere: exit 1, naming both names looked for and --noise.
    std::fs::remove_file(&noise).unwrap();
    let (_, stderr) = certify(&[&d.path().join("run.h5")], &["--force"], 1);
    assert!(
        stderr.contains("run.noise.json") && stderr.contains("--noise"),
        "{stderr}"
    );
}
