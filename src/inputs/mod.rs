//! Readers for the three kinds of input: run files, noise records and scenarios.
//!
//! Readers never open a file for writing, collect every problem of a file before failing, and
//! return checked models from [`crate::model`].

pub mod digest;
pub mod mapped;
pub mod noise_record;
pub mod regular;
pub mod run_file;
pub mod scenario;
