//! Broken and hostile inputs, and "nothing lost" (issue #7, items 1 and 4).
//!
//! The committed corpus under `tests/hostile/` is written by
//! `tests/reference/hostile/make_hostile.py` (byte edits of the h5py fixture, located with h5py
//! and the HDF5 File Format Specification's superblock layout; one-change edits of a valid
//! noise record). Cases that need a fresh certificate, a FIFO or a folder are made here. Every
//! case runs the binary and checks: the exit code of docs/robustness.md ("Exit codes": 1 bad input, 3 a
//! certificate that does not reproduce), a message naming the file and the problem, no panic,
//! no hang (a 60 s limit per run, far above the milliseconds each takes), and that the folder
//! holding the inputs and the output gained no entry, temporary files included.
//!
//! "Nothing lost": every command leaves its inputs' bytes and modification times alone, and a
//! `certify` killed with SIGKILL at any moment leaves no certificate and no partial file.

use std::ffi::OsString;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant, SystemTime};

use quassay::certificate::canonical::canonical_sha256_hex;
use quassay::inputs::run_file::read_run;
use quassay::model::Shots;
use quassay::outputs::run_file::{write_run, WriteOptions};
use serde_json::Value;

use crate::util::{certified, entries, quassay, reference, repo, scratch};

// ---------------------------------------------------------------------------------------------
// Helpers

/// A file of the committed corpus.
fn hostile(name: &str) -> PathBuf {
    repo().join("tests").join("hostile").join(name)
}

/// The corpus files whose names start with `prefix`, sorted.
fn corpus(prefix: &str) -> Vec<String> {
    entries(&repo().join("tests").join("hostile"))
        .into_iter()
        .filter(|n| n.starts_with(prefix))
        .collect()
}

/// What one run of the binary did.
struct Ran {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

/// Runs `quassay ARGS`; a run that does not end within 60 s is a hang and fails the test.
fn run(args: &[OsString]) -> Ran {
    let out = quassay()
        .args(args)
        .timeout(Duration::from_secs(60))
        .output()
        .unwrap();
    let r = Ran {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    };
    assert!(
        r.code.is_some(),
        "quassay {args:?} was killed (a hang?): {}",
        r.stderr
    );
    assert!(!r.stderr.contains("panicked"), "{args:?}: {}", r.stderr);
    r
}

fn os(args: &[&dyn AsRef<std::ffi::OsStr>]) -> Vec<OsString> {
    args.iter().map(|a| a.as_ref().to_os_string()).collect()
}

/// Runs `quassay ARGS` and asserts: exit `code`, every fragment in the message (standard error
/// for exit 1, the report on standard output for exit 3), and no new entry in `folder`.
fn refused(folder: &Path, args: &[OsString], code: i32, fragments: &[&str]) -> Ran {
    let before = entries(folder);
    let r = run(args);
    assert_eq!(r.code, Some(code), "{args:?}\n{}{}", r.stdout, r.stderr);
    let message = if code == 3 { &r.stdout } else { &r.stderr };
    for f in fragments {
        assert!(message.contains(f), "{args:?}: no {f:?} in\n{message}");
    }
    assert_eq!(entries(folder), before, "{args:?} left something behind");
    r
}

/// Makes a FIFO (named pipe) at `path`.
fn mkfifo(path: &Path) {
    use std::os::unix::ffi::OsStrExt;
    let c = std::ffi::CString::new(path.as_os_str().as_bytes()).unwrap();
    // SAFETY: a valid NUL-terminated path.
    assert_eq!(unsafe { libc::mkfifo(c.as_ptr(), 0o600) }, 0);
}

/// A folder `folder.EXT` and a FIFO `pipe.EXT` made in `dir`, each with the words its refusal
/// must use ("it is a folder", "it is a FIFO").
fn folder_and_fifo(dir: &Path, ext: &str) -> [(PathBuf, &'static str); 2] {
    let folder = dir.join(format!("folder.{ext}"));
    std::fs::create_dir(&folder).unwrap();
    let fifo = dir.join(format!("pipe.{ext}"));
    mkfifo(&fifo);
    [(folder, "it is a folder"), (fifo, "it is a FIFO")]
}

/// A fresh folder with the h5py fixture as `run.h5` and a valid noise record as `noise.json`.
fn inputs() -> tempfile::TempDir {
    let dir = scratch();
    std::fs::copy(reference("h5py/run_f32_gzip.h5"), dir.path().join("run.h5")).unwrap();
    std::fs::copy(
        reference("noise/valid/chain-detuning.json"),
        dir.path().join("noise.json"),
    )
    .unwrap();
    dir
}

/// `certify RUN --noise NOISE` (default output `RUN.cert.json` beside the run).
/// `quassay budget` for `noise` on an 8-site chain (a planning question any record answers).
fn budget_args(noise: &Path, json: bool) -> Vec<OsString> {
    let mut args = os(&[
        &"budget",
        &"--noise",
        &noise,
        &"--lattice",
        &"chain:8",
        &"--time-unit",
        &"us",
        &"--spectrum",
        &"-1,1",
        &"--target",
        &"0.1",
        &"--time",
        &"1",
    ]);
    if json {
        args.push("--json".into());
    }
    args
}

fn certify_args(run: &Path, noise: &Path) -> Vec<OsString> {
    os(&[&"certify", &run, &"--noise", &noise])
}

/// Certifies the fixture in `dir` to `run.cert.json`. The fixture's random numbers contradict
/// any record (tests/certify.rs, verdict test), so certify exits 3 and writes the certificate.
fn certify_fixture(dir: &Path) -> PathBuf {
    let r = run(&certify_args(&dir.join("run.h5"), &dir.join("noise.json")));
    assert_eq!(r.code, Some(3), "{}", r.stderr);
    let cert = dir.join("run.cert.json");
    certified(&cert);
    cert
}

/// Writes `cert` with its digest recomputed by the crate's canonical form: a careful forger.
fn reseal(path: &Path, mut cert: Value) {
    cert["digest"] = Value::String(canonical_sha256_hex(&cert["body"]).unwrap());
    std::fs::write(path, serde_json::to_string_pretty(&cert).unwrap()).unwrap();
}

// ---------------------------------------------------------------------------------------------
// Run files

/// Every committed broken run file, with what the message must say (besides the file's name).
const RUNS: &[(&str, &[&str])] = &[
    (
        "run-chunk-corrupt.h5",
        &["/observables/Z_1/values", "stored bytes are damaged"],
    ),
    ("run-empty.h5", &["/: the file is empty (0 bytes)"]),
    (
        "run-is-json.h5",
        &["does not start with the HDF5 signature"],
    ),
    (
        "run-superblock-eof.h5",
        &["/times", "stored bytes are damaged"],
    ),
    (
        "run-superblock-offset-size.h5",
        &["can be opened", "may be damaged"],
    ),
    (
        "run-superblock-root.h5",
        &["can be opened", "may be damaged"],
    ),
    (
        "run-superblock-version.h5",
        &["can be opened", "may be damaged"],
    ),
    (
        "run-truncated-13688.h5",
        &["is truncated: it has 13688 bytes"],
    ),
    (
        "run-truncated-27375.h5",
        &["is truncated: it has 27375 bytes"],
    ),
    (
        "run-truncated-3000.h5",
        &["is truncated: it has 3000 bytes"],
    ),
    (
        "run-truncated-4.h5",
        &["does not start with the HDF5 signature"],
    ),
    ("run-truncated-60.h5", &["is truncated: it has 60 bytes"]),
];

#[test]
fn every_broken_run_file_is_refused_by_inspect_and_certify_and_nothing_is_written() {
    let names: Vec<&str> = RUNS.iter().map(|(n, _)| *n).collect();
    assert_eq!(
        corpus("run-"),
        names,
        "the table covers tests/hostile/run-*"
    );
    let dir = inputs();
    for (name, fragments) in RUNS {
        let path = dir.path().join(name);
        std::fs::copy(hostile(name), &path).unwrap();
        let mut want = vec![*name];
        want.extend_from_slice(fragments);
        refused(dir.path(), &os(&[&"inspect", &path]), 1, &want);
        let noise = dir.path().join("noise.json");
        refused(dir.path(), &certify_args(&path, &noise), 1, &want);
    }
}

#[test]
fn a_folder_or_a_fifo_given_as_the_run_is_refused_without_opening_it() {
    let dir = inputs();
    let noise = dir.path().join("noise.json");
    for (path, what) in &folder_and_fifo(dir.path(), "h5") {
        let name = path.file_name().unwrap().to_str().unwrap();
        let want = ["cannot read", name, what, "give the path of a run file"];
        refused(dir.path(), &os(&[&"inspect", path]), 1, &want);
        // certify takes a folder as a folder of runs (batch): this one holds none.
        let want: &[&str] = if path.is_dir() {
            &[name, "holds no run file"]
        } else {
            &want
        };
        refused(dir.path(), &certify_args(path, &noise), 1, want);
    }
    // A character device never ends: refused the same way.
    let dev = Path::new("/dev/zero");
    refused(
        dir.path(),
        &os(&[&"inspect", &dev]),
        1,
        &["/dev/zero", "character device"],
    );
}

/// Bytes flipped inside a dataset's data: the contiguous `/times` (big-endian float64, located
/// with HDF5's `H5Dget_offset`) is read without complaint with another value, so the check is
/// `verify`: certify the original, corrupt the file, and `verify` must exit 3 naming the
/// dataset whose content digest changed. A flipped exponent byte in `/observables/Z_1/ideal`
/// makes the run invalid: `verify` exits 3 naming the file's digest.
#[test]
fn bytes_flipped_in_a_dataset_are_caught_by_verify() {
    let dir = inputs();
    let cert = certify_fixture(dir.path());
    let run_path = dir.path().join("run.h5");
    let original = std::fs::read(&run_path).unwrap();
    let offset = |ds: &str| -> usize {
        let f = hdf5::File::open(&run_path).unwrap();
        let o = f.dataset(ds).unwrap().offset().unwrap();
        usize::try_from(o).unwrap()
    };
    let (times, ideal) = (offset("times"), offset("observables/Z_1/ideal"));

    // times[2], big-endian: its last byte is the lowest of the mantissa.
    let mut bytes = original.clone();
    bytes[times + 8 * 2 + 7] ^= 0x01;
    std::fs::write(&run_path, &bytes).unwrap();
    let changed = read_run(&run_path).unwrap();
    assert_ne!(changed.times, read_run_bytes(&original).times);
    refused(
        dir.path(),
        &os(&[&"verify", &cert]),
        3,
        &[
            "FAILED: input `run`",
            "has changed",
            "/times",
            "content differs",
        ],
    );

    // ideal[0], little-endian: its last byte holds the sign and the top of the exponent.
    let mut bytes = original.clone();
    bytes[ideal + 7] ^= 0x7f;
    std::fs::write(&run_path, &bytes).unwrap();
    let r = refused(
        dir.path(),
        &os(&[&"verify", &cert]),
        3,
        &["FAILED: input `run`", "has changed", "SHA-256"],
    );
    assert!(r.stdout.contains("/observables/Z_1/ideal"), "{}", r.stdout);
    std::fs::write(&run_path, &original).unwrap();
    refused(dir.path(), &os(&[&"verify", &cert]), 0, &[]);
}

/// The run held in `bytes` (written to a scratch file and read).
fn read_run_bytes(bytes: &[u8]) -> quassay::model::Run {
    let dir = scratch();
    let p = dir.path().join("r.h5");
    std::fs::write(&p, bytes).unwrap();
    read_run(&p).unwrap()
}

// ---------------------------------------------------------------------------------------------
// Noise records

/// Every committed broken noise record, with what the message must say (besides its name).
const RECORDS: &[(&str, &[&str])] = &[
    (
        "noise-amplitude-1e400.json",
        &["line 14", "too large for a 64-bit float"],
    ),
    (
        "noise-amplitude-309-digits.json",
        &["line 14", "too large for a 64-bit float"],
    ),
    (
        "noise-amplitude-infinity.json",
        &["line 14", "NaN and Infinity are not JSON"],
    ),
    (
        "noise-amplitude-nan.json",
        &["line 14", "NaN and Infinity are not JSON"],
    ),
    (
        "noise-duplicate-amplitude.json",
        &["/sources/0/amplitude", "appears more than once"],
    ),
    ("noise-empty.json", &["/: is empty"]),
    (
        "noise-latin1-bytes.json",
        &[
            "not valid UTF-8: byte 433 (line 22",
            "save the file as UTF-8",
        ],
    ),
    (
        "noise-offset-minus-1e400.json",
        &["line 18", "too large for a 64-bit float"],
    ),
    (
        "noise-two-utf8-boms.json",
        &["more than one byte-order mark"],
    ),
    (
        "noise-utf16-bom.json",
        &["UTF-16 byte-order mark", "save it as UTF-8"],
    ),
];

#[test]
fn every_broken_noise_record_is_refused_by_certify_and_nothing_is_written() {
    let mut names: Vec<&str> = RECORDS.iter().map(|(n, _)| *n).collect();
    names.push("noise-utf8-bom.json"); // accepted: see the next test
    names.sort_unstable();
    assert_eq!(
        corpus("noise-"),
        names,
        "the table covers tests/hostile/noise-*"
    );
    let dir = inputs();
    let run_path = dir.path().join("run.h5");
    for (name, fragments) in RECORDS {
        let path = dir.path().join(name);
        std::fs::copy(hostile(name), &path).unwrap();
        let mut want = vec!["noise record", *name];
        want.extend_from_slice(fragments);
        refused(dir.path(), &certify_args(&run_path, &path), 1, &want);
    }
    // 100 000 nested arrays (made here: 100 kB of `[`): an error, not a stack overflow.
    let deep = dir.path().join("deep.json");
    std::fs::write(&deep, "[".repeat(100_000)).unwrap();
    refused(
        dir.path(),
        &certify_args(&run_path, &deep),
        1,
        &["deep.json", "nested more than 128 levels"],
    );
    for (path, what) in &folder_and_fifo(dir.path(), "json") {
        let name = path.file_name().unwrap().to_str().unwrap();
        let want = ["cannot read", name, what, "give the path of a noise record"];
        refused(dir.path(), &certify_args(&run_path, path), 1, &want);
        refused(dir.path(), &budget_args(path, false), 1, &want);
    }
}

/// A folder or a FIFO given as `simulate`'s scenario is refused before it is read (a FIFO
/// used to block the read forever); nothing is written into the output folder's parent.
#[test]
fn a_folder_or_a_fifo_given_as_the_scenario_is_refused() {
    let dir = scratch();
    let out = dir.path().join("out");
    for (path, what) in &folder_and_fifo(dir.path(), "json") {
        let name = path.file_name().unwrap().to_str().unwrap();
        let want = ["cannot read", name, what, "give the path of a scenario"];
        refused(dir.path(), &os(&[&"simulate", path, &"-o", &out]), 1, &want);
    }
}

/// A UTF-8 byte-order mark before the record is allowed (RFC 8259 §8.1: a parser may ignore
/// it): `budget` says exactly what it says for the same record without the mark.
#[test]
fn a_record_with_a_utf8_byte_order_mark_reads_as_the_same_record() {
    let budget = |noise: &Path| {
        let r = run(&budget_args(noise, true));
        assert_eq!(r.code, Some(0), "{}", r.stderr);
        let mut v: Value = serde_json::from_str(&r.stdout).unwrap();
        // The only difference allowed: the file's name.
        v.as_object_mut().unwrap().remove("noise_record").unwrap();
        v
    };
    let with = hostile("noise-utf8-bom.json");
    assert!(std::fs::read(&with).unwrap().starts_with(b"\xef\xbb\xbf"));
    assert_eq!(
        budget(&with),
        budget(&reference("noise/valid/chain-detuning.json"))
    );
}

// ---------------------------------------------------------------------------------------------
// Certificates

#[test]
fn certificates_with_forged_paths_or_numbers_do_not_verify() {
    let top = inputs();
    let dir = top.path().join("certs");
    std::fs::create_dir(&dir).unwrap();
    for f in ["run.h5", "noise.json"] {
        std::fs::rename(top.path().join(f), dir.join(f)).unwrap();
    }
    let cert_path = certify_fixture(&dir);
    let original = certified(&cert_path);
    // Copies one level up, so a path that climbs out would find a real file with the right
    // bytes: only the path check can refuse it.
    for f in ["run.h5", "noise.json"] {
        std::fs::copy(dir.join(f), top.path().join(f)).unwrap();
    }
    let forged = dir.join("forged.json");
    for (role, recorded, why) in [
        ("run", "../run.h5", "climbs out of the inputs folder"),
        (
            "noise_record",
            "../noise.json",
            "climbs out of the inputs folder",
        ),
        ("noise_record", "/etc/passwd", "is absolute"),
        ("run", "sub/../../run.h5", "climbs out of the inputs folder"),
    ] {
        let mut cert = original.clone();
        cert["body"]["inputs"][role]["path"] = Value::String(recorded.into());
        reseal(&forged, cert);
        certified(&forged);
        let want = [&format!("FAILED: input `{role}`") as &str, recorded, why];
        refused(&dir, &os(&[&"verify", &forged]), 3, &want);
    }

    // One bound recomputed by hand (halved), the digest recomputed over the edited body.
    let mut cert = original.clone();
    let e_wc = &mut cert["body"]["observables"][0]["e_wc"][1];
    let x = e_wc.as_f64().unwrap();
    *e_wc = serde_json::json!(x / 2.0);
    reseal(&forged, cert);
    certified(&forged);
    refused(
        &dir,
        &os(&[&"verify", &forged]),
        3,
        &["matches the body", "differs at /body/observables/0/e_wc/1"],
    );
    // The reviewer's reproduction catches it too.
    refused(
        &dir,
        &os(&[&"review", &forged, &"--inputs", &dir]),
        3,
        &["e_wc"],
    );
}

#[test]
fn broken_certificate_files_are_refused_by_verify_review_and_report() {
    let dir = inputs();
    let cert_path = certify_fixture(dir.path());
    let text = std::fs::read(&cert_path).unwrap();
    let report_out = dir.path().join("report.html");
    let commands = |cert: &Path| -> Vec<Vec<OsString>> {
        vec![
            os(&[&"verify", &cert]),
            os(&[&"review", &cert]),
            os(&[&"report", &cert, &"-o", &report_out]),
        ]
    };
    let mut cases: Vec<(String, Vec<u8>, Vec<&str>)> = Vec::new();
    for cut in [0, 1, text.len() / 2, text.len() - 2] {
        cases.push((
            format!("cut-{cut}.json"),
            text[..cut].to_vec(),
            vec!["certificate", "is not valid JSON"],
        ));
    }
    cases.push((
        "deep.json".into(),
        "{\"body\":".repeat(100_000).into_bytes(),
        vec!["certificate", "is not valid JSON", "recursion limit"],
    ));
    for (name, pointer) in [
        (
            "cert-wrong-format.json",
            "/format: must be \"quassay-certificate\"",
        ),
        ("cert-version-2.json", "/format_version: must be 1"),
    ] {
        let bytes = std::fs::read(hostile(name)).unwrap();
        cases.push((name.into(), bytes, vec!["certificate", pointer]));
    }
    assert_eq!(
        corpus("cert-").len(),
        2,
        "the cases cover tests/hostile/cert-*"
    );
    for (name, bytes, fragments) in &cases {
        let path = dir.path().join(name);
        std::fs::write(&path, bytes).unwrap();
        let mut want = fragments.clone();
        want.push(name);
        for args in commands(&path) {
            refused(dir.path(), &args, 1, &want);
        }
        std::fs::remove_file(&path).unwrap();
    }
    for (path, what) in &folder_and_fifo(dir.path(), "json") {
        let name = path.file_name().unwrap().to_str().unwrap();
        for args in commands(path) {
            refused(dir.path(), &args, 1, &["cannot read", name, what]);
        }
    }
    // The certificate is sound but its recorded run is now a FIFO: refused, not read.
    let run_path = dir.path().join("run.h5");
    std::fs::remove_file(&run_path).unwrap();
    mkfifo(&run_path);
    refused(
        dir.path(),
        &os(&[&"verify", &cert_path]),
        1,
        &["cannot read", "run.h5", "it is a FIFO"],
    );
}

// ---------------------------------------------------------------------------------------------
// Nothing lost

/// Bytes and modification time of every file below `dir` (recursively), by relative path.
fn snapshot(dir: &Path) -> Vec<(PathBuf, Vec<u8>, SystemTime)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            let meta = std::fs::metadata(&p).unwrap();
            if meta.is_dir() {
                stack.push(p);
            } else {
                let rel = p.strip_prefix(dir).unwrap().to_path_buf();
                out.push((rel, std::fs::read(&p).unwrap(), meta.modified().unwrap()));
            }
        }
    }
    out.sort_by(|a, b| a.0.cmp(&b.0));
    out
}

/// `simulate` a small invented scenario, then run every other command on its outputs: the
/// files each command reads keep their bytes and modification times. Each command's outputs
/// go to a separate folder, so the input folder must stay exactly as it was.
#[test]
fn no_command_modifies_its_inputs() {
    let inputs_dir = scratch();
    let out = scratch();
    let inp = inputs_dir.path();
    // The bundled invented scenario, cut down to 6 sites, 4 times, 6 realizations.
    let text = std::fs::read_to_string(repo().join("example_runs/chain12/scenario.json")).unwrap();
    let mut sc: Value = serde_json::from_str(&text).unwrap();
    sc["lattice"]["shape"] = serde_json::json!([6]);
    sc["times"]["count"] = serde_json::json!(4);
    sc["realizations"] = serde_json::json!(6);
    sc["observables"] = serde_json::json!([{ "name": "Z_2", "pauli": "Z", "sites": [2] }]);
    let scenario = inp.join("scenario.json");
    std::fs::write(&scenario, serde_json::to_string_pretty(&sc).unwrap()).unwrap();

    let check = |args: Vec<OsString>, codes: &[i32]| {
        let before = snapshot(inp);
        let r = run(&args);
        assert!(
            r.code.is_some_and(|c| codes.contains(&c)),
            "{args:?}: {:?}\n{}",
            r.code,
            r.stderr
        );
        assert!(snapshot(inp) == before, "{args:?} changed a file it read");
    };
    // simulate writes into a folder of its own; its outputs become the next inputs.
    let sim = out.path().join("sim");
    check(os(&[&"simulate", &scenario, &"-o", &sim]), &[0]);
    for f in ["run.h5", "noise.json"] {
        std::fs::copy(sim.join(f), inp.join(f)).unwrap();
    }
    let (run_path, noise) = (inp.join("run.h5"), inp.join("noise.json"));
    check(os(&[&"inspect", &run_path]), &[0]);
    check(os(&[&"inspect", &run_path, &"--json"]), &[0]);
    let cert = out.path().join("c.json");
    check(
        os(&[&"certify", &run_path, &"--noise", &noise, &"-o", &cert]),
        &[0, 3],
    );
    // From here on the certificate is an input too.
    std::fs::rename(&cert, inp.join("c.json")).unwrap();
    let cert = inp.join("c.json");
    check(os(&[&"verify", &cert]), &[0]);
    check(os(&[&"review", &cert]), &[0]);
    check(os(&[&"review", &cert, &"--inputs", &inp]), &[0]);
    let html = out.path().join("r.html");
    check(os(&[&"report", &cert, &"-o", &html]), &[0]);
    check(budget_args(&noise, false), &[0]);
    assert_eq!(
        entries(inp),
        ["c.json", "noise.json", "run.h5", "scenario.json"]
    );
}

/// A run of about 40 MB (the h5py fixture's rows repeated: 2 observables × 400 000
/// realizations × 5 times, float64, with a per-point shots dataset and standard errors).
fn large_run(path: &Path) {
    let mut run = read_run(&reference("h5py/run_f32_gzip.h5")).unwrap();
    const R: usize = 400_000;
    let tile = |a: &ndarray::Array2<f64>| {
        ndarray::Array2::from_shape_fn((R, a.ncols()), |(r, t)| a[[r % a.nrows(), t]])
    };
    for o in &mut run.observables {
        o.values = tile(&o.values);
        o.stderr = o.stderr.as_ref().map(tile);
        if let Shots::PerPoint(s) = &o.shots {
            let s = s.clone();
            o.shots = Shots::PerPoint(ndarray::Array2::from_shape_fn((R, s.ncols()), |(r, t)| {
                s[[r % s.nrows(), t]]
            }));
        }
    }
    write_run(path, &run, &WriteOptions::default()).unwrap();
}

/// Whether process `pid` has a file open in `dir` other than `inputs` (its certificate being
/// written), from the links of `/proc/PID/fd` (an unnamed temporary shows as
/// `DIR/#INODE (deleted)`, a named one by its name).
fn writes_into(pid: u32, dir: &Path, inputs: &[PathBuf]) -> bool {
    std::fs::read_dir(format!("/proc/{pid}/fd"))
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .filter_map(|e| std::fs::read_link(e.path()).ok())
                .any(|t| t.parent() == Some(dir) && !inputs.contains(&t))
        })
        .unwrap_or(false)
}

/// SIGKILL during a large certify, at several moments (fractions of an uninterrupted run's
/// duration, and the moment the certificate file is open for writing, seen in /proc): the
/// folder must afterwards hold exactly the inputs, with no certificate and no partial file.
#[test]
fn a_certify_killed_at_any_moment_leaves_no_certificate_and_no_partial_file() {
    let dir = scratch();
    let run_path = dir.path().join("big.h5");
    large_run(&run_path);
    let noise = dir.path().join("noise.json");
    std::fs::copy(reference("noise/valid/chain-detuning.json"), &noise).unwrap();
    let inputs = entries(dir.path());
    let bin = assert_cmd::cargo::cargo_bin("quassay");
    let spawn = || {
        std::process::Command::new(&bin)
            .arg("certify")
            .arg(&run_path)
            .arg("--noise")
            .arg(&noise)
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap()
    };
    // An uninterrupted run, for its duration (and to show it does write a certificate).
    let start = Instant::now();
    let status = spawn().wait().unwrap();
    let full = start.elapsed();
    assert_eq!(
        status.code(),
        Some(3),
        "the fixture's numbers are inconsistent"
    );
    let cert = dir.path().join("big.cert.json");
    certified(&cert);
    std::fs::remove_file(&cert).unwrap();

    let real_dir = dir.path().canonicalize().unwrap();
    let read = [
        run_path.canonicalize().unwrap(),
        noise.canonicalize().unwrap(),
    ];
    for k in 0..6 {
        let mut child = spawn();
        if k < 5 {
            std::thread::sleep(full.mul_f64(f64::from(k) / 5.0));
        } else {
            // Wait until the certificate is open for writing, then kill at once.
            while child.try_wait().unwrap().is_none() && !writes_into(child.id(), &real_dir, &read)
            {
                std::thread::sleep(Duration::from_micros(200));
            }
        }
        let _ = child.kill(); // SIGKILL on Unix
        let _ = child.wait();
        let left = entries(dir.path());
        if left.len() > inputs.len() {
            // Killed too late: the certificate was complete. It must be whole, then.
            let mut whole = inputs.clone();
            whole.push("big.cert.json".to_string());
            whole.sort();
            assert_eq!(
                left, whole,
                "moment {k}: something else than the certificate was left"
            );
            certified(&cert);
            std::fs::remove_file(&cert).unwrap();
        }
        assert_eq!(entries(dir.path()), inputs, "moment {k}");
    }
}
