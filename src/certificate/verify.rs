//! Re-verification of a certificate from its archived inputs.
//!
//! In order: the digest of the body; the recorded input paths (relative, inside the inputs
//! folder); each input's size and SHA-256; then the whole body recomputed with the recorded
//! options and compared byte for byte in canonical form. The first failure is reported with
//! the JSON pointer of the first field that differs.
//!
//! A repacked run (same numbers, other chunking, compression, byte order or float width) has
//! other bytes but the same content digests (docs/certificate.md). When the run's size or SHA-256
//! differ, verification goes on: it fails if any dataset's content digest differs, and
//! otherwise compares the recomputed body with everything except `/inputs/run/size` and
//! `/inputs/run/sha256`, and says that the file was repacked. The noise record (a small text
//! file) must match byte for byte.

use std::path::{Path, PathBuf};

use serde_json::Value;

use super::body::CertifyOptions;
use super::canonical::to_canonical_bytes;
use super::certify::compute_body;
use super::document::Certificate;
use super::record::{resolve_recorded, FileRecord};
use crate::bounds::confidence::Simultaneity;
use crate::error::{Error, InputKind, Result};

pub use super::document::CERTIFICATE;
const INPUT_FILE: &str = "the archived input the certificate records (a regular file)";

/// The result of a verification.
#[derive(Debug, Clone, PartialEq)]
pub struct VerifyReport {
    /// Whether everything reproduced.
    pub reproduces: bool,
    /// Whether the run file's bytes differ from the recorded ones while the content digest of
    /// every dataset and everything else in the body reproduce (the file was repacked).
    pub repacked: bool,
    /// What was checked, one line each, in order; the last says what failed, if anything.
    pub lines: Vec<String>,
}

/// The first JSON pointer at which `a` and `b` differ, with both values (shortened).
pub fn first_difference(a: &Value, b: &Value) -> Option<(String, String, String)> {
    fn walk(a: &Value, b: &Value, ptr: &mut String) -> Option<(String, String, String)> {
        match (a, b) {
            (Value::Object(x), Value::Object(y)) => {
                let mut keys: Vec<&String> = x.keys().chain(y.keys()).collect();
                keys.sort();
                keys.dedup();
                for k in keys {
                    let len = ptr.len();
                    ptr.push('/');
                    ptr.push_str(&k.replace('~', "~0").replace('/', "~1"));
                    let r = match (x.get(k), y.get(k)) {
                        (Some(u), Some(v)) => walk(u, v, ptr),
                        (u, v) => Some((ptr.clone(), show(u), show(v))),
                    };
                    if r.is_some() {
                        return r;
                    }
                    ptr.truncate(len);
                }
                None
            }
            (Value::Array(x), Value::Array(y)) => {
                for i in 0..x.len().max(y.len()) {
                    let len = ptr.len();
                    ptr.push_str(&format!("/{i}"));
                    let r = match (x.get(i), y.get(i)) {
                        (Some(u), Some(v)) => walk(u, v, ptr),
                        (u, v) => Some((ptr.clone(), show(u), show(v))),
                    };
                    if r.is_some() {
                        return r;
                    }
                    ptr.truncate(len);
                }
                None
            }
            _ => {
                let same = match (to_canonical_bytes(a), to_canonical_bytes(b)) {
                    (Ok(x), Ok(y)) => x == y,
                    _ => a == b,
                };
                (!same).then(|| (ptr.clone(), show(Some(a)), show(Some(b))))
            }
        }
    }
    fn show(v: Option<&Value>) -> String {
        match v {
            None => "(absent)".into(),
            Some(v) => {
                let s = v.to_string();
                if s.chars().count() > 80 {
                    format!("{}…", s.chars().take(80).collect::<String>())
                } else {
                    s
                }
            }
        }
    }
    walk(a, b, &mut String::new())
}

/// ` (dataset /observables/x/values)` for a pointer `/<index>/...` into a datasets array.
fn dataset_named(datasets: &Value, ptr: &str) -> String {
    let index = ptr
        .trim_start_matches('/')
        .split('/')
        .next()
        .and_then(|i| i.parse::<usize>().ok());
    match index
        .and_then(|i| datasets.get(i))
        .and_then(|d| d["path"].as_str())
    {
        Some(p) => format!(" (dataset {p})"),
        None => String::new(),
    }
}

fn recorded_options(cert_path: &Path, body: &Value) -> Result<CertifyOptions> {
    let o = &body["options"];
    let bad = |p: &str, m: &str| Error::input(InputKind::Certificate, cert_path, p, m);
    let confidence = o["confidence"]
        .as_f64()
        .ok_or_else(|| bad("/body/options/confidence", "is missing or not a number"))?;
    let check_level = o["check_level"]
        .as_f64()
        .ok_or_else(|| bad("/body/options/check_level", "is missing or not a number"))?;
    let simultaneity = match o["statement"].as_str() {
        Some("simultaneous") => Simultaneity::Simultaneous,
        Some("pointwise") => Simultaneity::Pointwise,
        _ => {
            return Err(bad(
                "/body/options/statement",
                "must be \"simultaneous\" or \"pointwise\"",
            ))
        }
    };
    // Absent in certificates made before the data statement existed (and whenever the data
    // statement was switched off): the model statement alone.
    let data_share = match o.get("data_share") {
        None => 0.0,
        Some(v) => v
            .as_f64()
            .filter(|s| (0.0..1.0).contains(s))
            .ok_or_else(|| bad("/body/options/data_share", "is not a number in [0, 1)"))?,
    };
    Ok(CertifyOptions {
        confidence,
        simultaneity,
        check_level,
        data_share,
    })
}

fn recorded_file(cert_path: &Path, body: &Value, role: &str) -> Result<FileRecord> {
    let v = &body["inputs"][role];
    let pointer = format!("/body/inputs/{role}");
    let bad = |m: &str| Error::input(InputKind::Certificate, cert_path, pointer.clone(), m);
    Ok(FileRecord {
        path: v["path"]
            .as_str()
            .ok_or_else(|| bad("`path` is missing or not a string"))?
            .to_owned(),
        size: v["size"]
            .as_u64()
            .ok_or_else(|| bad("`size` is missing or not an integer"))?,
        sha256: v["sha256"]
            .as_str()
            .ok_or_else(|| bad("`sha256` is missing or not a string"))?
            .to_owned(),
    })
}

/// Verifies the certificate at `cert_path`, with inputs below `inputs_dir` (default: the
/// certificate's folder). Input errors (unreadable files) are `Err`; a certificate that does not
/// reproduce is `Ok` with `reproduces == false`.
pub fn verify(cert_path: &Path, inputs_dir: Option<&Path>) -> Result<VerifyReport> {
    // A FIFO or device given as the certificate would block or never end the read.
    crate::inputs::regular::check_regular(cert_path, CERTIFICATE)?;
    let cert = Certificate::read(cert_path)?;
    let mut lines = Vec::new();
    let fail = |mut lines: Vec<String>, why: String| {
        lines.push(why);
        Ok(VerifyReport {
            reproduces: false,
            repacked: false,
            lines,
        })
    };
    if !cert.digest_matches() {
        return fail(
            lines,
            "FAILED: the digest does not match the body: the certificate was altered after it was issued".into(),
        );
    }
    lines.push(format!("digest {} matches the body", cert.digest));
    let base: PathBuf = match inputs_dir {
        Some(d) => d.to_path_buf(),
        None => match cert_path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        },
    };
    let mut resolved = Vec::new();
    // A run whose bytes changed may only have been repacked; that is decided below from the
    // content digests of its datasets (docs/certificate.md: repacking must not break verification).
    let mut run_bytes_changed: Option<(FileRecord, FileRecord)> = None;
    for role in ["run", "noise_record"] {
        let rec = recorded_file(cert_path, &cert.body, role)?;
        let path = match resolve_recorded(&base, &rec.path) {
            Ok(p) => p,
            Err(why) => return fail(lines, format!("FAILED: input `{role}`: {why}")),
        };
        // The recorded name could now be a FIFO, a device or a folder: hashing it would block
        // or never end, so anything but a regular file is refused first.
        crate::inputs::regular::check_regular(&path, INPUT_FILE)?;
        let now = FileRecord::of(&path, rec.path.clone())?;
        if now.size != rec.size || now.sha256 != rec.sha256 {
            if role == "run" {
                run_bytes_changed = Some((rec.clone(), now));
                resolved.push((path, rec.path));
                continue;
            }
            return fail(
                lines,
                format!(
                    "FAILED: input `{role}` '{}' has changed: recorded {} bytes, SHA-256 {}; found {} bytes, SHA-256 {}",
                    path.display(), rec.size, rec.sha256, now.size, now.sha256
                ),
            );
        }
        lines.push(format!(
            "input `{role}` '{}': {} bytes, SHA-256 matches",
            path.display(),
            now.size
        ));
        resolved.push((path, rec.path));
    }
    let options = recorded_options(cert_path, &cert.body)?;
    let (noise, noise_name) = resolved.pop().unwrap_or_default();
    let (run, run_name) = resolved.pop().unwrap_or_default();
    let computed = compute_body(&run, &noise, run_name, noise_name, &options);
    let mut recomputed = match (computed, &run_bytes_changed) {
        (Ok(c), _) => c,
        // The run's bytes changed and it no longer reads as a valid run: it has changed.
        (Err(e), Some((rec, now))) => {
            return fail(
                lines,
                format!(
                    "FAILED: input `run` '{}' has changed (recorded {} bytes, SHA-256 {}; found {} bytes, SHA-256 {}) and no longer reads as a valid run: {e}",
                    run.display(), rec.size, rec.sha256, now.size, now.sha256
                ),
            )
        }
        (Err(e), None) => return Err(e),
    };
    let mut repacked = false;
    if let Some((rec, now)) = &run_bytes_changed {
        let recorded = &cert.body["inputs"]["run"]["datasets"];
        let found = &recomputed.body["inputs"]["run"]["datasets"];
        if let Some((ptr, a, b)) = first_difference(recorded, found) {
            return fail(
                lines,
                format!(
                    "FAILED: input `run` '{}' has changed: recorded {} bytes, SHA-256 {}; found {} bytes, SHA-256 {}; its content differs from the recorded one at /body/inputs/run/datasets{ptr}{}: the certificate says {a}, the file gives {b}",
                    run.display(), rec.size, rec.sha256, now.size, now.sha256,
                    dataset_named(recorded, &ptr),
                ),
            );
        }
        lines.push(format!(
            "input `run` '{}': the file's bytes differ from the recorded ones (recorded {} bytes, SHA-256 {}; found {} bytes, SHA-256 {}), but the content digest of every dataset matches: the file was repacked, its numbers are unchanged",
            run.display(), rec.size, rec.sha256, now.size, now.sha256
        ));
        // The body records the file's size and SHA-256; a repacked file has its own, so those
        // two members (and only those) are taken from the certificate before comparing.
        recomputed.body["inputs"]["run"]["size"] = cert.body["inputs"]["run"]["size"].clone();
        recomputed.body["inputs"]["run"]["sha256"] = cert.body["inputs"]["run"]["sha256"].clone();
        repacked = true;
    }
    let ours = to_canonical_bytes(&recomputed.body).ok();
    let theirs = to_canonical_bytes(&cert.body).ok();
    if ours.is_some() && ours == theirs {
        lines.push(if repacked {
            "the body recomputed from the inputs is identical, byte for byte, apart from /body/inputs/run/size and /body/inputs/run/sha256 (those of the repacked file)".into()
        } else {
            "the body recomputed from the inputs is identical, byte for byte".into()
        });
        return Ok(VerifyReport {
            reproduces: true,
            repacked,
            lines,
        });
    }
    let recorded_version = cert.body["tool"]["version"]
        .as_str()
        .unwrap_or("?")
        .to_owned();
    let version_note = if recorded_version != env!("CARGO_PKG_VERSION") {
        format!(
            " (the certificate was made by quassay {recorded_version}, this is {}; use that version to reproduce it)",
            env!("CARGO_PKG_VERSION")
        )
    } else {
        String::new()
    };
    let why = match first_difference(&cert.body, &recomputed.body) {
        Some((ptr, a, b)) => format!(
            "FAILED: the recomputed body differs at /body{ptr}: the certificate says {a}, the inputs give {b}{version_note}"
        ),
        None => format!("FAILED: the recomputed body differs{version_note}"),
    };
    fail(lines, why)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn the_first_difference_is_named_by_its_pointer() {
        let a = json!({"x": [1, 2, {"y": "a"}], "z": 0});
        let b = json!({"x": [1, 2, {"y": "b"}], "z": 0});
        let (p, u, v) = first_difference(&a, &b).unwrap();
        assert_eq!(p, "/x/2/y");
        assert_eq!((u.as_str(), v.as_str()), ("\"a\"", "\"b\""));
        assert_eq!(first_difference(&a, &a), None);
        let c = json!({"x": [1, 2, {"y": "a"}]});
        assert_eq!(first_difference(&a, &c).unwrap().0, "/z");
        // 1.0 and 1 are the same number in canonical form.
        assert_eq!(first_difference(&json!(1.0), &json!(1)), None);
    }
}
