//! The command line: parse, dispatch, print, and map outcomes to exit codes.
//!
//! Exit codes are a contract (docs/robustness.md, "Exit codes"): 0 success; 1 bad input or I/O error; 2 usage error
//! (clap's own); 3 the work ran but the answer is negative. A broken pipe on standard output is
//! not an error.

pub mod args;
pub mod assemble;
pub mod batch;
pub mod budget;
pub mod certify;
pub mod inspect;
pub mod report;
pub mod review;
pub mod simulate;
pub mod verify;

use std::io::Write;
use std::process::ExitCode;

use clap::Parser;

use args::{Cli, Command};

/// What a command that ran to the end found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Exit 0.
    Success,
    /// Exit 3: the work ran but the answer is negative.
    Negative,
    /// Exit 1: some of the work failed on bad input or I/O (a batch whose other items went
    /// on); every failure was already reported.
    Failed,
    /// Exit 2: a usage error found after parsing (e.g. `-o` with several runs); already
    /// reported.
    Usage,
}

impl Outcome {
    /// The exit code of this outcome.
    pub fn code(self) -> u8 {
        match self {
            Outcome::Success => 0,
            Outcome::Negative => EXIT_NEGATIVE,
            Outcome::Failed => EXIT_INPUT,
            Outcome::Usage => EXIT_USAGE,
        }
    }
}

/// Exit code for a bad input or an I/O error.
pub const EXIT_INPUT: u8 = 1;
/// Exit code for a usage error.
pub const EXIT_USAGE: u8 = 2;
/// Exit code for a negative answer.
pub const EXIT_NEGATIVE: u8 = 3;

/// Runs the program and returns its exit code (docs/robustness.md, "Exit codes").
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let code = if e.use_stderr() { EXIT_USAGE } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    // Progress bars: only on a terminal, never beside JSON output.
    {
        use std::io::IsTerminal as _;
        crate::progress::enable(std::io::stderr().is_terminal() && !cli.command.json());
    }
    let result = match &cli.command {
        Command::Inspect(a) => inspect::run(a),
        Command::Assemble(a) => assemble::run(a),
        // One run file as before, or a batch (several runs, or folders of runs).
        Command::Certify(a) => match a.runs.as_slice() {
            [one] if !one.is_dir() => certify::run_single(a, one),
            _ => batch::run(a),
        },
        Command::Verify(a) => verify::run(a),
        Command::Simulate(a) => simulate::run(a),
        Command::Review(a) => review::run(a),
        Command::Budget(a) => budget::run(a),
        Command::Report(a) => report::run(a),
    };
    match result {
        Ok(outcome) => ExitCode::from(outcome.code()),
        Err(e) => {
            let _ = writeln!(std::io::stderr(), "error: {e}");
            ExitCode::from(EXIT_INPUT)
        }
    }
}

/// Writes `text` to standard output; a closed pipe (`quassay inspect run.h5 | head`) is not an
/// error, any other failure is.
pub fn print_stdout(text: &str) -> crate::Result<()> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(crate::Error::Write {
            path: "<standard output>".into(),
            message: e.to_string(),
        }),
    }
}
