//! `quassay inspect`: a readable summary of a run file and every problem with its layout.

use super::args::InspectArgs;
use super::Outcome;

/// Runs `inspect`.
pub fn run(_args: &InspectArgs) -> crate::Result<Outcome> {
    Err(crate::Error::Options("inspect is not implemented yet".into()))
}
