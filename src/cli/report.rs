//! `quassay report`: a self-contained HTML report with plots of a certificate.
//!
//! The report is drawn from the certificate's body alone (`outputs::report`), so it can be made
//! for any archived certificate; `certify --report` writes the same page for the certificate it
//! has just issued.

use std::path::{Path, PathBuf};

use super::{print_stdout, Outcome};
use crate::certificate::document::Certificate;
use crate::outputs::atomic::{check_free, write_bytes};
use crate::outputs::report::report_html;

/// The command line of `quassay report`.
#[derive(Debug, clap::Args)]
pub struct ReportArgs {
    /// The certificate (JSON, format quassay-certificate v1).
    #[arg(value_name = "CERT.json")]
    pub certificate: PathBuf,
    /// The HTML file to write.
    #[arg(short = 'o', long = "output", value_name = "REPORT.html")]
    pub output: PathBuf,
    /// Replace an existing report.
    #[arg(long)]
    pub force: bool,
}

/// Writes the report of `cert` (read from `cert_path`) to `output`, atomically; an existing
/// file is kept unless `force`.
pub fn write_report(
    cert: &Certificate,
    cert_path: &Path,
    output: &Path,
    force: bool,
) -> crate::Result<()> {
    let html = report_html(&cert.body, cert_path)?;
    write_bytes(output, force, html.as_bytes())
}

/// Runs `report`.
pub fn run(args: &ReportArgs) -> crate::Result<Outcome> {
    check_free(&args.output, args.force)?;
    // A FIFO or device given as the certificate would block or never end the read.
    crate::inputs::regular::check_regular(
        &args.certificate,
        crate::certificate::verify::CERTIFICATE,
    )?;
    let cert = Certificate::read(&args.certificate)?;
    write_report(&cert, &args.certificate, &args.output, args.force)?;
    let mut note = String::new();
    if !cert.digest_matches() {
        note = "\nnote: the certificate's digest does not match its body (it was altered after \
                it was issued); the report shows the body as it stands: run quassay verify"
            .into();
    }
    print_stdout(&format!(
        "report {} written for certificate {} (digest {}){note}\n",
        args.output.display(),
        args.certificate.display(),
        cert.digest
    ))?;
    Ok(Outcome::Success)
}
