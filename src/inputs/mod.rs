//! Readers for the kinds of input: run files, noise records, scenarios, and the NumPy arrays
//! with their description that `quassay assemble` turns into a run file.
//!
//! Readers never open a file for writing, collect every problem of a file before failing, and
//! return checked models from [`crate::model`].

pub mod arrays;
pub mod digest;
pub(crate) mod json_reader;
pub mod mapped;
pub mod noise_record;
pub mod regular;
pub mod run_file;
pub mod scenario;
