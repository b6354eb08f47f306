//! The whole certificate file: format, digest, body and envelope; sealing and reading.
//!
//! `digest` is the SHA-256 (lowercase hex) of the RFC 8785 form of `body`. The file holds the
//! body in exactly that form, on its first line after `{"body":`, so it is serialised once
//! (the same bytes go to the file and to SHA-256) and anyone can check the digest by hashing
//! the bytes of the body member. The other top-level members follow one per line, the
//! envelope pretty-printed. Reading accepts any JSON layout (verification re-canonicalises
//! the body), so certificates written pretty-printed by earlier versions still read and
//! verify; a change to any value of the body does not. The `envelope` records what does not
//! follow from the inputs (issue time, host, command line) and is not covered.

use std::path::Path;

use serde_json::{json, Value};

use super::body::{FORMAT, FORMAT_VERSION};
use super::canonical::{canonical_sha256_hex, write_canonical, CanonicalWriteError};
use crate::error::{Error, InputKind, Problem, Result};

/// What a certificate is, for messages about a path that is not one.
pub const CERTIFICATE: &str = "a certificate (JSON, format quassay-certificate v1)";

/// A sealed certificate.
#[derive(Debug, Clone, PartialEq)]
pub struct Certificate {
    pub body: Value,
    /// SHA-256 of the canonical body, as recorded in the file.
    pub digest: String,
    pub envelope: Value,
}

/// The digest of a body: SHA-256 of its RFC 8785 form; `None` if it has no canonical form.
/// The form is hashed as it is written, never held whole.
pub fn body_digest(body: &Value) -> Option<String> {
    canonical_sha256_hex(body).ok()
}

const DIGEST_METHOD: &str = "SHA-256 of the RFC 8785 (JSON Canonicalization Scheme) form of body";

/// The error for a body without a canonical form (a `Value` cannot hold NaN or infinity, so
/// this is not expected).
pub(crate) fn non_finite() -> Error {
    Error::Options("internal: the certificate body holds a non-finite number".into())
}

/// Writes the file's text to `w`: the top-level members one per line, in the order of their
/// names; `body` in its RFC 8785 form, serialised once and, if `digest` is `None`, hashed as
/// it is written; then the digest (the given one, or the one just computed), which is
/// returned; the envelope pretty-printed; a final newline.
fn write_document(
    body: &Value,
    digest: Option<&str>,
    envelope: &Value,
    w: &mut dyn std::io::Write,
) -> std::result::Result<String, CanonicalWriteError> {
    w.write_all(b"{\"body\":")?;
    let computed = write_canonical(body, w, digest.is_none())?;
    let digest = match (digest, computed) {
        (Some(d), _) => d.to_owned(),
        (None, Some(d)) => d,
        (None, None) => String::new(), // not reached: hashing was asked for
    };
    let string = |s: &str| Value::String(s.to_owned()).to_string();
    write!(
        w,
        ",\n\"digest\":{},\n\"digest_method\":{},\n\"envelope\":",
        string(&digest),
        string(DIGEST_METHOD)
    )?;
    serde_json::to_writer_pretty(&mut *w, envelope).map_err(std::io::Error::other)?;
    write!(
        w,
        ",\n\"format\":{},\n\"format_version\":{FORMAT_VERSION}}}\n",
        string(FORMAT)
    )?;
    Ok(digest)
}

/// Writes the file's text (the layout of `write_document` above) to the temporary `tmp`
/// standing for `path`, through a buffer: the text is never held whole. The digest is the given
/// one or, if `None`, computed as the body is written; it is returned. The atomic write around
/// it is [`crate::outputs::certificate_file`].
pub fn write_document_file(
    body: &Value,
    digest: Option<&str>,
    envelope: &Value,
    tmp: &Path,
    path: &Path,
) -> Result<String> {
    let fail = |e: std::io::Error| Error::Write {
        path: path.to_path_buf(),
        message: e.to_string(),
    };
    let file = std::fs::File::create(tmp).map_err(fail)?;
    let mut w = std::io::BufWriter::with_capacity(1 << 16, file);
    let digest = write_document(body, digest, envelope, &mut w).map_err(|e| match e {
        CanonicalWriteError::Canonical(_) => non_finite(),
        CanonicalWriteError::Io(e) => fail(e),
    })?;
    std::io::Write::flush(&mut w).map_err(fail)?;
    Ok(digest)
}

impl Certificate {
    /// Seals `body` with its digest and the given envelope.
    pub fn seal(body: Value, envelope: Value) -> Result<Certificate> {
        let digest = body_digest(&body).ok_or_else(non_finite)?;
        Ok(Certificate {
            body,
            digest,
            envelope,
        })
    }

    /// The file's text (see [`Certificate::write_file_text`]).
    pub fn to_file_text(&self) -> String {
        let mut bytes = Vec::new();
        // Writing into a Vec cannot fail, and every number in a Value is finite.
        let _ = self.write_file_text(&mut bytes);
        String::from_utf8(bytes).unwrap_or_default()
    }

    /// Writes the file's text to `w` (e.g. a buffered file, so the text is never held whole):
    /// `{"body":` and the body's RFC 8785 form on the first line, then `digest` (as recorded),
    /// `digest_method`, `envelope` (pretty-printed), `format` and `format_version`, one per
    /// line, and a final newline.
    pub fn write_file_text(&self, w: &mut impl std::io::Write) -> std::io::Result<()> {
        match write_document(&self.body, Some(&self.digest), &self.envelope, w) {
            Ok(_) => Ok(()),
            Err(CanonicalWriteError::Io(e)) => Err(e),
            Err(e @ CanonicalWriteError::Canonical(_)) => Err(std::io::Error::other(e)),
        }
    }

    /// Reads a certificate file; problems of its outer structure are input errors.
    pub fn read(path: &Path) -> Result<Certificate> {
        // A regular file only (a FIFO would block the read forever).
        let bytes = crate::inputs::regular::read_regular(path, CERTIFICATE)?;
        Certificate::from_bytes(&bytes).map_err(|problems| Error::Input {
            kind: InputKind::Certificate,
            file: path.to_path_buf(),
            problems,
        })
    }

    /// Parses the bytes of a certificate file (what [`Certificate::read`] does once the file
    /// is read): they must be UTF-8, then as [`Certificate::parse`]. No I/O.
    pub fn from_bytes(bytes: &[u8]) -> std::result::Result<Certificate, Vec<Problem>> {
        let text = std::str::from_utf8(bytes).map_err(|e| {
            vec![Problem::new(
                "/",
                format!("is not UTF-8 text (byte {})", e.valid_up_to()),
            )]
        })?;
        Certificate::parse(text)
    }

    /// Parses the text of a certificate file and checks its outer structure (format, version,
    /// digest, body); every problem found is returned. The digest is not compared here: see
    /// [`Certificate::digest_matches`]. No I/O.
    pub fn parse(text: &str) -> std::result::Result<Certificate, Vec<Problem>> {
        let mut v: Value = serde_json::from_str(text).map_err(|e| {
            vec![Problem::new(
                "/",
                format!(
                    "is not valid JSON: {e} (line {}, column {})",
                    e.line(),
                    e.column()
                ),
            )]
        })?;
        let mut problems = Vec::new();
        if v.get("format").and_then(Value::as_str) != Some(FORMAT) {
            problems.push(Problem::new(
                "/format",
                format!("must be \"{FORMAT}\"; this is not a quassay certificate"),
            ));
        }
        if v.get("format_version").and_then(Value::as_u64) != Some(FORMAT_VERSION) {
            problems.push(Problem::new(
                "/format_version",
                format!("must be {FORMAT_VERSION}; this version of quassay reads only version {FORMAT_VERSION}"),
            ));
        }
        let digest = v.get("digest").and_then(Value::as_str).map(str::to_owned);
        if digest.is_none() {
            problems.push(Problem::new("/digest", "is missing or not a string"));
        }
        // Moved out of the parsed document, not copied (a body may be large).
        let body = match v.get_mut("body") {
            Some(b) if b.is_object() => Some(b.take()),
            _ => None,
        };
        if body.is_none() {
            problems.push(Problem::new("/body", "is missing or not an object"));
        }
        match (digest, body, problems.is_empty()) {
            (Some(digest), Some(body), true) => Ok(Certificate {
                body,
                digest,
                envelope: v
                    .get_mut("envelope")
                    .map(Value::take)
                    .unwrap_or(Value::Null),
            }),
            _ => Err(problems),
        }
    }

    /// Whether the recorded digest is the digest of the body as it stands.
    pub fn digest_matches(&self) -> bool {
        body_digest(&self.body).as_deref() == Some(self.digest.as_str())
    }
}

/// The envelope of a certificate issued now.
///
/// By default it holds no host name and no directory: the command line keeps its options and
/// values, but every argument that names an existing file or folder, and the program itself,
/// is cut to its last component, so a certificate attached to a public dataset does not
/// disclose the machine or its folders. With `full`, the host name and the command line as
/// typed are recorded, for a lab's internal records.
pub fn envelope_now(full: bool) -> Value {
    let args: Vec<String> = std::env::args().collect();
    if !full {
        let command_line: Vec<String> = args
            .iter()
            .enumerate()
            .map(|(i, a)| private_argument(i, a))
            .collect();
        return json!({
            "issued_at": utc_now_rfc3339(),
            "command_line": command_line,
            "note": "the envelope is not covered by the digest; paths are cut to their file names",
        });
    }
    let host = std::fs::read_to_string("/etc/hostname")
        .map(|s| s.trim().to_owned())
        .ok()
        .filter(|s| !s.is_empty())
        .or_else(|| std::env::var("HOSTNAME").ok())
        .unwrap_or_else(|| "unknown".into());
    json!({
        "issued_at": utc_now_rfc3339(),
        "host": host,
        "command_line": args,
        "note": "the envelope is not covered by the digest",
    })
}

/// One argument of the command line for the default envelope: the program and anything with
/// a directory part (`/`) cut to the last component, `--option=PATH` likewise after the `=`.
fn private_argument(index: usize, arg: &str) -> String {
    let last = |s: &str| -> String {
        let trimmed = s.trim_end_matches('/');
        match trimmed.rsplit_once('/') {
            Some((_, name)) if !name.is_empty() => name.to_owned(),
            _ if trimmed.is_empty() => s.to_owned(),
            _ => trimmed.to_owned(),
        }
    };
    if index == 0 {
        return last(arg);
    }
    match arg.split_once('=') {
        Some((opt, value)) if opt.starts_with("--") && value.contains('/') => {
            format!("{opt}={}", last(value))
        }
        _ if arg.contains('/') => last(arg),
        _ => arg.to_owned(),
    }
}

/// The current time as `YYYY-MM-DDTHH:MM:SSZ` (RFC 3339, UTC).
pub fn utc_now_rfc3339() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    rfc3339_from_unix(secs)
}

/// Formats Unix seconds as RFC 3339 UTC, by the civil-from-days algorithm (proleptic
/// Gregorian calendar).
pub fn rfc3339_from_unix(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let rem = secs % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        (rem / 60) % 60,
        rem % 60
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_default_envelope_keeps_no_directory() {
        assert_eq!(private_argument(0, "/home/someone/bin/quassay"), "quassay");
        assert_eq!(private_argument(1, "certify"), "certify");
        assert_eq!(private_argument(2, "/home/someone/data/run.h5"), "run.h5");
        assert_eq!(
            private_argument(3, "--noise=/srv/lab/noise.json"),
            "--noise=noise.json"
        );
        assert_eq!(private_argument(4, "runs/"), "runs");
        assert_eq!(private_argument(5, "0.95"), "0.95");
        assert_eq!(private_argument(6, "/"), "/");
        let e = envelope_now(false);
        assert!(e.get("host").is_none());
        assert!(envelope_now(true).get("host").is_some());
    }

    #[test]
    fn unix_times_format_as_rfc_3339() {
        // Reference points: the Unix epoch; 2000-03-01 (after a leap day of a century year
        // divisible by 400) is 951868800 s; 2026-12-01T00:00:00Z is 1796083200 s (both computed
        // with Python's datetime.datetime(..., tzinfo=timezone.utc).timestamp()).
        assert_eq!(rfc3339_from_unix(0), "1970-01-01T00:00:00Z");
        assert_eq!(rfc3339_from_unix(951_868_800), "2000-03-01T00:00:00Z");
        assert_eq!(
            rfc3339_from_unix(1_796_083_200 + 3_723),
            "2026-12-01T01:02:03Z"
        );
    }

    /// The file's text is the layout of docs/certificate.md, "The file", byte for byte: the body's
    /// canonical form (exactly the bytes hashed) after `{"body":`, then the other members one
    /// per line; as JSON it is the whole document. The body's byte span, found by a plain
    /// byte search, hashes (SHA-256, FIPS 180-4, tested in `hash`) to `digest`.
    #[test]
    fn the_file_holds_the_canonical_body_then_the_digest() {
        use super::super::canonical::to_canonical_json;
        use super::super::hash::sha256_hex;
        let c = Certificate::seal(
            json!({"z": [1.5, -0.0, 1e-7], "a": {"k": "v\u{e9}\n"}, "o": [{"x": 1}, [2]]}),
            json!({"host": "h", "note": null}),
        )
        .unwrap();
        let canonical = to_canonical_json(&c.body).unwrap();
        assert_eq!(
            canonical,
            "{\"a\":{\"k\":\"v\u{e9}\\n\"},\"o\":[{\"x\":1},[2]],\"z\":[1.5,0,1e-7]}"
        );
        let want = format!(
            "{{\"body\":{canonical},\n\"digest\":\"{}\",\n\"digest_method\":\"{DIGEST_METHOD}\",\n\
             \"envelope\":{{\n  \"host\": \"h\",\n  \"note\": null\n}},\n\
             \"format\":\"{FORMAT}\",\n\"format_version\":{FORMAT_VERSION}}}\n",
            c.digest
        );
        let text = c.to_file_text();
        assert_eq!(text, want);
        // As JSON it is the whole document, the body read back in its canonical form (−0 is
        // written 0, RFC 8785 §3.2.2.3: the one value of this body that changes on reading).
        let mut body = c.body.clone();
        body["z"][1] = json!(0);
        let whole = json!({
            "format": FORMAT,
            "format_version": FORMAT_VERSION,
            "digest": c.digest,
            "digest_method": DIGEST_METHOD,
            "body": body,
            "envelope": c.envelope,
        });
        assert_eq!(serde_json::from_str::<Value>(&text).unwrap(), whole);
        let start = "{\"body\":".len();
        let end = text.find(",\n\"digest\"").unwrap();
        assert_eq!(sha256_hex(&text.as_bytes()[start..end]), c.digest);
    }

    /// A certificate in the earlier layout (the whole document pretty-printed by serde_json,
    /// as quassay wrote it before) still reads as the same certificate, and its digest still
    /// matches; an altered value in it does not.
    #[test]
    fn the_earlier_pretty_printed_layout_still_reads_and_verifies() {
        let c = Certificate::seal(
            json!({"z": [1.5, -0.0, 1e-7], "a": {"k": "v\u{e9}"}, "o": [{"x": 1}, {"y": [2]}]}),
            json!({"host": "h"}),
        )
        .unwrap();
        let old = serde_json::to_string_pretty(&json!({
            "body": c.body,
            "digest": c.digest,
            "digest_method": DIGEST_METHOD,
            "envelope": c.envelope,
            "format": FORMAT,
            "format_version": FORMAT_VERSION,
        }))
        .unwrap()
            + "\n";
        assert!(old.starts_with("{\n  \"body\": {\n    \"a\": {"), "{old}");
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("old.json");
        std::fs::write(&path, &old).unwrap();
        let read = Certificate::read(&path).unwrap();
        assert_eq!(read, c);
        assert!(read.digest_matches());
        let altered = old.replace("\"x\": 1", "\"x\": 2");
        assert_ne!(altered, old);
        assert!(!Certificate::parse(&altered).unwrap().digest_matches());
    }

    /// The entry points without I/O: bad bytes, bad JSON and a wrong outer structure are
    /// problems (all of them at once), never a panic; the text of a sealed certificate reads
    /// back as that certificate.
    #[test]
    fn bytes_and_text_parse_without_io() {
        let p = Certificate::from_bytes(b"{\"format\": \"\xff\"}").unwrap_err();
        assert_eq!(p.len(), 1);
        assert_eq!(p[0].path, "/");
        assert!(p[0].message.contains("not UTF-8 text (byte 12)"), "{p:?}");
        let p = Certificate::parse("{\"body\": ").unwrap_err();
        assert!(p[0].message.contains("not valid JSON"), "{p:?}");
        let p = Certificate::parse("{\"format\": \"x\", \"body\": []}").unwrap_err();
        let paths: Vec<&str> = p.iter().map(|p| p.path.as_str()).collect();
        assert_eq!(paths, ["/format", "/format_version", "/digest", "/body"]);
        let c = Certificate::seal(json!({"a": [1, 2.5]}), json!({"host": "h"})).unwrap();
        assert_eq!(Certificate::parse(&c.to_file_text()).unwrap(), c);
        assert_eq!(
            Certificate::from_bytes(c.to_file_text().as_bytes()).unwrap(),
            c
        );
    }

    #[test]
    fn a_changed_body_no_longer_matches_its_digest() {
        let c = Certificate::seal(json!({"a": 1, "b": [0.5, "x"]}), json!({})).unwrap();
        assert!(c.digest_matches());
        let mut altered = c.clone();
        altered.body["a"] = json!(2);
        assert!(!altered.digest_matches());
    }
}
