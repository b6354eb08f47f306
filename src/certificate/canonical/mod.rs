//! Canonical JSON per RFC 8785 (JSON Canonicalization Scheme), for the certificate's body.
//!
//! The body's SHA-256 is its digest, so the bytes must be the same on every machine: object
//! members sorted by the UTF-16 code units of their names, no whitespace, strings escaped as
//! ECMAScript's `JSON.stringify` does, and numbers written as ECMAScript's
//! `Number.prototype.toString` writes IEEE 754 doubles (RFC 8785 §3.2.2.3).
//!
//! Numbers: the `zmij` crate (Schubfach, the printer serde_json uses) gives the shortest
//! digits that round-trip, nearest to the value; an exact tie between two such candidates is
//! resolved to the even one here, which is ECMAScript's choice among candidates of that
//! length (checked against Python's `repr` on 13 294 numbers and RFC 8785 Appendix B). The
//! layout (plain or exponent form, `e+`/`e-`) is ECMAScript's: zmij's text is kept where it
//! already is (most numbers), and laid out again from its digits otherwise.
//! serde_json integers are converted to the nearest double first, as RFC 8785 §3.2.2.3 says
//! (integers beyond 2^53 lose precision there, by design of the scheme).
//!
//! The form is written once and handed, as it is produced, to SHA-256 and to a writer (the
//! certificate file holds exactly the hashed bytes). The elements of a large array (one
//! object per observable) are serialised in parallel, each into its own text by the same
//! sequential code, and emitted in their order: the bytes do not depend on the threads.
//!
//! The files: this one holds the entry points and the errors; `writer` the serialiser (values,
//! members in UTF-16 order, strings, the parallel arrays, the buffered sink to SHA-256 and the
//! writer); `number` ECMAScript's number form.

mod number;
mod writer;

use writer::{non_finite_error, write_value, Out, Sink, Stop, FLUSH_BYTES};

use serde_json::Value;
use sha2::{Digest, Sha256};

pub use number::number_to_string;

/// Why a value has no canonical form.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum CanonicalError {
    /// NaN and infinities have no JSON form (RFC 8785 §3.2.2.3).
    #[error(
        "the number at '{pointer}' is not finite; JSON (RFC 8785) has no form for NaN or infinity"
    )]
    NonFinite { pointer: String },
}

/// The RFC 8785 canonical form of `v`.
pub fn to_canonical_json(v: &Value) -> Result<String, CanonicalError> {
    let mut out = Out::whole();
    match write_value(v, &mut out) {
        Ok(()) => Ok(out.buf),
        Err(_) => Err(non_finite_error(v)),
    }
}

/// The UTF-8 bytes of the canonical form (what is hashed).
pub fn to_canonical_bytes(v: &Value) -> Result<Vec<u8>, CanonicalError> {
    to_canonical_json(v).map(String::into_bytes)
}

/// Lowercase hexadecimal SHA-256 of the canonical form of `v`, computed while the form is
/// written (in pieces of about 64 KiB: the whole form is never held in memory).
pub fn canonical_sha256_hex(v: &Value) -> Result<String, CanonicalError> {
    let mut hasher = Sha256::new();
    match write_streamed(v, Some(&mut hasher), None) {
        Ok(()) => Ok(super::hash::hex(&hasher.finalize())),
        // Nothing is written, so the only stop is a non-finite number.
        Err(_) => Err(non_finite_error(v)),
    }
}

/// Why the canonical form could not be written.
#[derive(Debug, thiserror::Error)]
pub enum CanonicalWriteError {
    #[error(transparent)]
    Canonical(#[from] CanonicalError),
    #[error(transparent)]
    Io(#[from] std::io::Error),
}

/// Writes the canonical form of `v` to `w` as it is produced (in pieces of about 64 KiB, or
/// whole elements of a large array: never the whole form at once) and, if `hash`, returns the
/// lowercase hexadecimal SHA-256 of exactly the bytes written (`None` without `hash`). The
/// one serialisation then serves both the file and the digest.
///
/// Large arrays (two or more elements, all objects or arrays) have their elements serialised
/// in parallel, each into its own text, and emitted in order: the bytes are those of the
/// sequential writer.
pub fn write_canonical(
    v: &Value,
    w: &mut dyn std::io::Write,
    hash: bool,
) -> Result<Option<String>, CanonicalWriteError> {
    let mut hasher = hash.then(Sha256::new);
    match write_streamed(v, hasher.as_mut(), Some(w)) {
        Ok(()) => Ok(hasher.map(|h| super::hash::hex(&h.finalize()))),
        Err(Stop::NonFinite) => Err(non_finite_error(v).into()),
        Err(Stop::Io(e)) => Err(e.into()),
    }
}

/// The canonical form of `v`, handed in pieces to `hasher` and `w` (either may be absent).
fn write_streamed<'a>(
    v: &Value,
    hasher: Option<&'a mut Sha256>,
    w: Option<&'a mut dyn std::io::Write>,
) -> Result<(), Stop> {
    let mut out = Out {
        buf: String::with_capacity(FLUSH_BYTES + 4096),
        sink: Some(Sink { hasher, w }),
        parallel: true,
    };
    write_value(v, &mut out)?;
    out.flush()
}

#[cfg(test)]
mod tests;
