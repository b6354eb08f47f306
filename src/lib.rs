//! quassay: rigorous, explicit-constant error bounds for analog quantum simulation data.
//!
//! The modules follow the data's path through the tool:
//!
//! * [`inputs`]: reading run files (HDF5), noise records (JSON) and simulation scenarios;
//! * [`model`]: the checked, typed model of a run, its lattice and its noise;
//! * [`bounds`]: the pure mathematics of `docs/method.md` (no I/O);
//! * [`checks`]: statistical consistency of the data with the noise record;
//! * [`certificate`]: canonical JSON, hashing and the certificate itself;
//! * [`outputs`]: writing files atomically (runs, records, certificates);
//! * [`simulate`]: exact state-vector simulation that produces synthetic runs;
//! * [`cli`]: the command line, kept thin;
//! * [`numbers`]: the JSON form of a computed number (below both checks and certificate);
//! * [`progress`]: counts of long work, drawn as bars on a terminal only (a side channel that
//!   never reaches an output).
//!
//! Each module uses only modules below it: `model`, `error`, `numbers` and `progress` nothing
//! else;
//! `inputs` and `bounds` the model; `checks` the bounds; `certificate` the checks, bounds and
//! inputs; `simulate` the inputs; `outputs` the certificate, inputs and simulator; `cli` all.

pub mod bounds;
pub mod certificate;
pub mod checks;
pub mod cli;
pub mod error;
pub mod inputs;
pub mod model;
pub mod numbers;
pub mod outputs;
pub mod progress;
pub mod simulate;

pub use error::{Error, InputKind, Problem, Result};
