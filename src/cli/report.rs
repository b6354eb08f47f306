//! `quassay report`: a self-contained HTML report with plots of a certificate.

use super::Outcome;

/// The command line of `quassay report`.
#[derive(Debug, clap::Args)]
pub struct ReportArgs {
    /// The certificate (JSON, format quassay-certificate v1).
    pub certificate: std::path::PathBuf,
}

/// Runs `report`.
pub fn run(_args: &ReportArgs) -> crate::Result<Outcome> {
    Err(crate::Error::Options("`quassay report` is not available yet".into()))
}
