//! `quassay review`: a certificate explained in plain language for a referee.

use super::Outcome;

/// The command line of `quassay review`.
#[derive(Debug, clap::Args)]
pub struct ReviewArgs {
    /// The certificate (JSON, format quassay-certificate v1).
    pub certificate: std::path::PathBuf,
}

/// Runs `review`.
pub fn run(_args: &ReviewArgs) -> crate::Result<Outcome> {
    Err(crate::Error::Options("`quassay review` is not available yet".into()))
}
