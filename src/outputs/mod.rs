//! Writing outputs: whole or not at all, never over an existing file without `--force`.
//!
//! Every output goes to a temporary file in the destination's folder and is renamed into place
//! once complete (a rename within one file system is atomic), so a reader never sees a half
//! written file and a failure leaves nothing behind.

pub mod atomic;
pub mod certificate_file;
pub mod noise_record;
pub mod report;
pub mod run_file;
pub mod truth_file;
