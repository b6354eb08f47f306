//! The command line as typed: clap's derive structures, parsed with no I/O.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

/// Certified error bounds for analog quantum simulation data.
#[derive(Debug, Parser)]
#[command(name = "quassay", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Show what a run file holds and every problem with its layout.
    Inspect(InspectArgs),
    /// Write a run file from NumPy arrays (.npy, .npz) and a JSON description of them.
    Assemble(super::assemble::AssembleArgs),
    /// Compute error bounds and the fidelity bound for a run and write a certificate.
    Certify(CertifyArgs),
    /// Recompute a certificate from its archived inputs and check it reproduces byte for byte.
    Verify(VerifyArgs),
    /// Write a synthetic run and its noise record from an exact simulation.
    Simulate(SimulateArgs),
    /// Explain a certificate to a referee, and test a stated error against it.
    Review(super::review::ReviewArgs),
    /// Plan a run: the largest noise, longest time or largest system for a target error.
    Budget(super::budget::BudgetArgs),
    /// Write a self-contained HTML report with plots of a certificate.
    Report(super::report::ReportArgs),
}

impl Command {
    /// Whether the command prints JSON (then no progress bar is drawn beside it).
    pub fn json(&self) -> bool {
        match self {
            Command::Inspect(a) => a.json,
            Command::Certify(a) => a.json,
            Command::Verify(a) => a.json,
            Command::Review(a) => a.json,
            Command::Budget(a) => a.json,
            Command::Assemble(_) | Command::Simulate(_) | Command::Report(_) => false,
        }
    }
}

/// `quassay inspect RUN.h5`.
#[derive(Debug, Args)]
pub struct InspectArgs {
    /// The run file (HDF5, layout quassay-run v1).
    pub run: PathBuf,
    /// Print the summary as JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

/// `quassay simulate SCENARIO.json -o DIR`.
#[derive(Debug, Args)]
pub struct SimulateArgs {
    /// The scenario (JSON, format quassay-scenario v1).
    pub scenario: PathBuf,
    /// Folder to write run.h5, noise.json and truth.h5 into (created if missing).
    #[arg(short = 'o', long = "output")]
    pub output: PathBuf,
    /// Replace existing output files.
    #[arg(long)]
    pub force: bool,
    /// Override the scenario's seed.
    #[arg(long)]
    pub seed: Option<u64>,
}

/// `quassay certify RUN.h5 --noise NOISE.json`, or several runs and folders of runs
/// (docs/batch.md).
#[derive(Debug, Args)]
pub struct CertifyArgs {
    /// The run file (HDF5, layout quassay-run v1); or several run files and folders, each
    /// folder giving its *.h5 files, certified in parallel with one certificate each.
    #[arg(required = true, value_name = "RUN.h5|DIR")]
    pub runs: Vec<PathBuf>,
    /// The noise record (JSON, format quassay-noise v1), used for every run [default: the
    /// record beside each run: RUN.noise.json, else noise.json in the run's folder].
    #[arg(long, value_name = "NOISE.json")]
    pub noise: Option<PathBuf>,
    /// Where to write the certificate, for a single run [default: RUN.cert.json beside the
    /// run].
    #[arg(short = 'o', long = "output", value_name = "CERT.json")]
    pub output: Option<PathBuf>,
    /// Confidence level 1 - epsilon of the claim, strictly between 0 and 1.
    #[arg(long, default_value_t = 0.95, value_parser = open_unit_interval)]
    pub confidence: f64,
    /// Make the claim at each (time, observable) point separately instead of simultaneously.
    #[arg(long)]
    pub pointwise: bool,
    /// Level of the consistency checks of the data against the noise record.
    #[arg(long, default_value_t = 0.01, value_parser = open_unit_interval)]
    pub check_level: f64,
    /// Share of the failure probability epsilon given to the data statement (the interval
    /// from the realizations themselves), from 0 (model statement alone) to below 1; the
    /// model statement gets the rest. See docs/method.md section 6.
    #[arg(long, default_value_t = 0.5, value_parser = data_share)]
    pub data_share: f64,
    /// Record the host name and the command line as typed (with its absolute paths) in the
    /// certificate's envelope, for a lab's internal records; by default the envelope holds
    /// neither, so a certificate attached to a public dataset does not disclose them.
    #[arg(long)]
    pub full_envelope: bool,
    /// Print the summary as JSON on standard output instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Replace an existing certificate (and report).
    #[arg(long)]
    pub force: bool,
    /// Also write a self-contained HTML report with plots of the certificate, for a single run.
    #[arg(long, value_name = "REPORT.html")]
    pub report: Option<PathBuf>,
    /// Also write a report beside each certificate, as RUN.report.html.
    #[arg(long, conflicts_with = "report")]
    pub reports: bool,
}

/// `quassay verify CERT.json`.
#[derive(Debug, Args)]
pub struct VerifyArgs {
    /// The certificate (JSON, format quassay-certificate v1).
    pub certificate: PathBuf,
    /// Folder holding the inputs under their recorded paths [default: the certificate's folder].
    #[arg(long, value_name = "DIR")]
    pub inputs: Option<PathBuf>,
    /// Print the report as JSON.
    #[arg(long)]
    pub json: bool,
}

/// Parses a probability strictly between 0 and 1 (a usage error otherwise).
fn open_unit_interval(text: &str) -> Result<f64, String> {
    let x: f64 = text
        .parse()
        .map_err(|_| format!("'{text}' is not a number; give e.g. 0.95"))?;
    if x > 0.0 && x < 1.0 {
        Ok(x)
    } else {
        Err(format!("{x} is not strictly between 0 and 1"))
    }
}

fn data_share(text: &str) -> Result<f64, String> {
    let x: f64 = text.parse().map_err(|_| {
        format!("'{text}' is not a number; give e.g. 0.5, or 0 for the model statement alone")
    })?;
    if (0.0..1.0).contains(&x) {
        Ok(x)
    } else {
        Err(format!(
            "{x} is not in [0, 1): the model statement always keeps a share (its systematic and \
             bias terms enter the data statement)"
        ))
    }
}
