//! Fuzz target `canonical_roundtrip`: the RFC 8785 writer is a fixed point and its numbers
//! read back exactly.
//!
//! 1. Bytes that are JSON: canonical bytes, parsed again and canonicalised again, must be the
//!    same bytes (RFC 8785 §3: the canonical form of a canonical form is itself); the form
//!    must mean what the input meant (same strings, names and structure; every number the
//!    same double, RFC 8785 §3.2.2.3); the streamed SHA-256 must be the digest of those bytes.
//! 2. Every input's first 8 bytes as an IEEE 754 double (little-endian): a finite x must be
//!    written by `number_to_string` as text that parses back to x bit for bit (−0 aside,
//!    written `0` by RFC 8785 §3.2.2.3), and a non-finite x must have no text.

#![no_main]

use libfuzzer_sys::fuzz_target;
use quassay::certificate::canonical::{canonical_sha256_hex, number_to_string, to_canonical_bytes};
use quassay::certificate::hash::sha256_hex;
use serde_json::Value;

fuzz_target!(|data: &[u8]| {
    if let Ok(value) = serde_json::from_slice::<Value>(data) {
        // serde_json never holds a non-finite number, so every value has a canonical form.
        let once = to_canonical_bytes(&value).expect("a parsed value has a canonical form");
        let back: Value = serde_json::from_slice(&once).unwrap_or_else(|e| {
            panic!(
                "canonical form does not parse: {e}: {}",
                String::from_utf8_lossy(&once)
            )
        });
        let twice = to_canonical_bytes(&back).expect("a parsed value has a canonical form");
        assert_eq!(
            once,
            twice,
            "not a fixed point:\n{}\n{}",
            String::from_utf8_lossy(&once),
            String::from_utf8_lossy(&twice)
        );
        assert!(
            same_meaning(&value, &back),
            "the canonical form means something else:\n{}",
            String::from_utf8_lossy(&once)
        );
        assert_eq!(canonical_sha256_hex(&value).ok(), Some(sha256_hex(&once)));
    }
    if data.len() >= 8 {
        let mut b = [0u8; 8];
        b.copy_from_slice(&data[..8]);
        let x = f64::from_le_bytes(b);
        match number_to_string(x) {
            Some(text) => {
                assert!(x.is_finite(), "{x:?} written as {text}");
                let y: f64 = text
                    .parse()
                    .unwrap_or_else(|e| panic!("{text} (from {x:?}) does not parse: {e}"));
                let want = if x == 0.0 { 0.0 } else { x };
                assert_eq!(y.to_bits(), want.to_bits(), "{x:?} written as {text}");
                // And as JSON, through serde_json's reader.
                let z: f64 = serde_json::from_str(&text).expect("canonical number is JSON");
                assert_eq!(
                    z.to_bits(),
                    want.to_bits(),
                    "{x:?} written as {text} (JSON)"
                );
            }
            None => assert!(!x.is_finite(), "{x:?} has no text"),
        }
    }
});

/// Equal as RFC 8785 reads JSON: numbers compared as doubles (so `1` and `1.0` agree, and −0
/// equals 0), everything else exactly; member order does not matter (a map).
fn same_meaning(a: &Value, b: &Value) -> bool {
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => double(x) == double(y),
        (Value::Array(x), Value::Array(y)) => {
            x.len() == y.len() && x.iter().zip(y).all(|(u, v)| same_meaning(u, v))
        }
        (Value::Object(x), Value::Object(y)) => {
            x.len() == y.len()
                && x.iter()
                    .all(|(k, u)| y.get(k).is_some_and(|v| same_meaning(u, v)))
        }
        _ => a == b,
    }
}

/// A JSON number as the nearest double, as RFC 8785 §3.2.2.3 reads it.
fn double(n: &serde_json::Number) -> f64 {
    match (n.as_u64(), n.as_i64()) {
        (Some(u), _) => u as f64,
        (None, Some(i)) => i as f64,
        _ => n.as_f64().unwrap_or(f64::NAN),
    }
}
