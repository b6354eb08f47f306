//! `quassay simulate`: exact simulation of a scenario into a run file and its noise record.

use super::args::SimulateArgs;
use super::Outcome;

/// Runs `simulate`.
pub fn run(_args: &SimulateArgs) -> crate::Result<Outcome> {
    Err(crate::Error::Options("simulate is not implemented yet".into()))
}
