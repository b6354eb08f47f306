//! The certificate: canonical JSON (RFC 8785), SHA-256 digests, body and envelope.

pub mod canonical;
pub mod hash;
