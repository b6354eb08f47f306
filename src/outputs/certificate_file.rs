//! Writing a certificate file: atomically, streamed, never over an existing file without
//! `--force`.
//!
//! Why here and not in `certificate`: the certificate layer says what the file holds
//! ([`crate::certificate::document`]: the text, the digest, reading it back); putting bytes on
//! the disk whole or not at all is this layer's job ([`super::atomic`]), and the certificate
//! must not depend on the layer above it.

use std::path::Path;

use serde_json::Value;

use super::atomic::write_file;
use crate::certificate::document::{non_finite, write_document_file, Certificate};
use crate::error::Result;

/// Seals `body` and writes the certificate to `path` as [`write_certificate`] does: the same
/// file as [`Certificate::seal`] followed by `write_certificate`, but the body is serialised
/// once, its canonical bytes going to the file and to SHA-256 as they are produced.
pub fn seal_and_write(
    body: Value,
    envelope: Value,
    path: &Path,
    force: bool,
) -> Result<Certificate> {
    let mut digest = None;
    write_file(path, force, |tmp| {
        digest = Some(write_document_file(&body, None, &envelope, tmp, path)?);
        Ok(())
    })?;
    let digest = digest.ok_or_else(non_finite)?;
    Ok(Certificate {
        body,
        digest,
        envelope,
    })
}

/// Writes the file text of `cert` to `path` atomically ([`write_file`]), streamed through a
/// buffer: the text is never held whole in memory. Without `force`, an existing `path` is an
/// error and is left untouched.
pub fn write_certificate(cert: &Certificate, path: &Path, force: bool) -> Result<()> {
    write_file(path, force, |tmp| {
        write_document_file(&cert.body, Some(&cert.digest), &cert.envelope, tmp, path).map(drop)
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    /// Sealing while writing gives the file, digest and certificate of sealing first and
    /// writing afterwards, and refuses an existing file without `force` just the same.
    #[test]
    fn sealing_while_writing_gives_the_same_file() {
        let dir = tempfile::tempdir().unwrap();
        let body = json!({"z": [1, 2.5, -0.0, 1e-7], "a": {"b": "ü\u{2028}"}});
        let env = json!({"host": "h"});
        let (one, two) = (dir.path().join("one.json"), dir.path().join("two.json"));
        let a = Certificate::seal(body.clone(), env.clone()).unwrap();
        write_certificate(&a, &one, false).unwrap();
        let b = seal_and_write(body.clone(), env.clone(), &two, false).unwrap();
        assert_eq!(a, b);
        assert_eq!(std::fs::read(&one).unwrap(), std::fs::read(&two).unwrap());
        assert!(seal_and_write(body.clone(), env.clone(), &two, false).is_err());
        seal_and_write(body, env, &two, true).unwrap();
        assert_eq!(std::fs::read(&one).unwrap(), std::fs::read(&two).unwrap());
    }

    /// Written to a file: the file text exactly, read back as the same certificate; not over
    /// an existing file without force.
    #[test]
    fn a_written_certificate_reads_back() {
        let c = Certificate::seal(
            json!({"z": [1.5, -0.0, 1e-7], "a": {"k": "v\u{e9}\n"}, "o": [{"x": 1}, [2]]}),
            json!({"host": "h", "note": null}),
        )
        .unwrap();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("c.json");
        write_certificate(&c, &path, false).unwrap();
        assert_eq!(std::fs::read_to_string(&path).unwrap(), c.to_file_text());
        let read = Certificate::read(&path).unwrap();
        let mut body = c.body.clone();
        body["z"][1] = json!(0);
        assert_eq!((&read.body, &read.digest), (&body, &c.digest));
        assert!(read.digest_matches());
        assert!(write_certificate(&c, &path, false).is_err());
        write_certificate(&c, &path, true).unwrap();
    }
}
