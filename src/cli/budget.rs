//! `quassay budget`: the inverse questions of planning (bounds.md §7).

use super::Outcome;

/// The command line of `quassay budget`.
#[derive(Debug, clap::Args)]
pub struct BudgetArgs {
    /// The noise record (JSON, format quassay-noise v1).
    #[arg(long)]
    pub noise: std::path::PathBuf,
}

/// Runs `budget`.
pub fn run(_args: &BudgetArgs) -> crate::Result<Outcome> {
    Err(crate::Error::Options("`quassay budget` is not available yet".into()))
}
