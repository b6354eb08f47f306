//! The certificate: canonical JSON (RFC 8785), SHA-256 digests, body and envelope.

pub mod body;
pub mod canonical;
pub mod certify;
pub mod claim;
pub mod device;
pub mod document;
/// The digests live with the readers (they are computed as the inputs are read); the old path
/// stays.
pub use crate::inputs::digest as hash;
pub mod record;
pub mod review;
pub mod verify;
