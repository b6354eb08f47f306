//! The certificate: canonical JSON (RFC 8785), SHA-256 digests, body and envelope.

pub mod body;
pub mod canonical;
pub mod certify;
pub mod claim;
pub mod document;
pub mod hash;
pub mod record;
pub mod review;
pub mod verify;
