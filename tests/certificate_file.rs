//! Integration tests for the layout of the certificate file: the body is written once, in its
//! RFC 8785 form, and the digest is the SHA-256 of exactly those bytes; certificates written
//! in the earlier pretty-printed layout still verify.
//!
//! The digest is checked outside quassay's canonical writer: the body's byte span is found by
//! a plain byte search in the file and hashed by the `sha2` crate (RustCrypto's SHA-256, FIPS
//! 180-4), not by quassay's writer or hash module.

use std::path::Path;

use serde_json::Value;
use sha2::{Digest, Sha256};

use crate::util::{certified, quassay, reference, scratch};

/// Certifies the h5py fixture (written by an HDF5 writer independent of quassay) with the
/// `chain-detuning` noise record into `dir/run.cert.json`; returns the file's bytes.
fn certify_fixture(dir: &Path) -> Vec<u8> {
    std::fs::copy(reference("h5py/run_f32_gzip.h5"), dir.join("run.h5")).unwrap();
    std::fs::copy(
        reference("noise/valid/chain-detuning.json"),
        dir.join("noise.json"),
    )
    .unwrap();
    let out = quassay()
        .arg("certify")
        .arg(dir.join("run.h5"))
        .arg("--noise")
        .arg(dir.join("noise.json"))
        .output()
        .unwrap();
    // 0: consistent; 3: inconsistent (docs/robustness.md, "Exit codes"); a certificate is written either way.
    let code = out.status.code();
    assert!(
        matches!(code, Some(0 | 3)),
        "{code:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    certified(&dir.join("run.cert.json"));
    std::fs::read(dir.join("run.cert.json")).unwrap()
}

/// The file starts with `{"body":`, the body runs to the first `,\n"digest"` (the canonical
/// form has no raw line break: RFC 8785 escapes one inside a string as `\n`), and the SHA-256
/// of that span, by the `sha2` crate, is the recorded digest. The span is the body's JSON,
/// on one line; the other top-level members follow one per line, in the order of docs/certificate.md.
#[test]
fn the_body_bytes_in_the_file_hash_to_the_digest() {
    let dir = scratch();
    let bytes = certify_fixture(dir.path());
    let head = b"{\"body\":";
    assert!(bytes.starts_with(head));
    let end = bytes
        .windows(11)
        .position(|w| w == b",\n\"digest\":")
        .unwrap();
    let span = &bytes[head.len()..end];
    assert!(!span.contains(&b'\n'));
    let sha: String = Sha256::digest(span)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    let cert: Value = serde_json::from_slice(&bytes).unwrap();
    assert_eq!(cert["digest"].as_str(), Some(sha.as_str()));
    assert_eq!(serde_json::from_slice::<Value>(span).unwrap(), cert["body"]);
    // The members after the body, one per line, and a final newline.
    let text = std::str::from_utf8(&bytes[end..]).unwrap();
    let starts: Vec<&str> = text
        .lines()
        .filter(|l| l.starts_with('"'))
        .map(|l| &l[..l.find(':').unwrap()])
        .collect();
    assert_eq!(
        starts,
        [
            "\"digest\"",
            "\"digest_method\"",
            "\"envelope\"",
            "\"format\"",
            "\"format_version\""
        ]
    );
    assert!(text.ends_with("\n\"format_version\":1}\n"), "{text}");
}

/// A certificate rewritten in the earlier layout (the whole document pretty-printed by
/// serde_json) still reads and reproduces under `quassay verify` (exit 0); changing a value
/// of its body then makes verify fail (exit 3).
#[test]
fn a_certificate_in_the_earlier_pretty_layout_still_verifies() {
    let dir = scratch();
    let bytes = certify_fixture(dir.path());
    let cert: Value = serde_json::from_slice(&bytes).unwrap();
    let path = dir.path().join("run.cert.json");
    let pretty = serde_json::to_string_pretty(&cert).unwrap() + "\n";
    assert!(pretty.starts_with("{\n  \"body\": {\n"));
    std::fs::write(&path, &pretty).unwrap();
    let out = quassay().arg("verify").arg(&path).assert().code(0);
    let stdout = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    assert!(stdout.contains("identical, byte for byte"), "{stdout}");
    let mut altered = cert.clone();
    altered["body"]["run"]["times"][0] = serde_json::json!(12345.5);
    std::fs::write(&path, serde_json::to_string_pretty(&altered).unwrap()).unwrap();
    quassay().arg("verify").arg(&path).assert().code(3);
}
