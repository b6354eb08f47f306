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
    /// Write a synthetic run and its noise record from an exact simulation.
    Simulate(SimulateArgs),
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
