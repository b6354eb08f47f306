//! Errors a user can cause, with messages that name the file, the place inside it and the fix.
//!
//! Every input problem is a [`Problem`]: a path inside the file (an HDF5 path such as
//! `/observables/Z_5/values`, or a JSON pointer such as `/sources/0/amplitude`) and a message
//! that says what is wrong and how to fix it. Readers collect all problems of a file before they
//! fail, so that a user fixes a file in one round. Every variant of [`Error`] maps to exit code 1
//! (docs/robustness.md, "Exit codes"); usage errors (2) are clap's, negative answers (3) are results,
//! not errors.

use std::fmt;
use std::path::{Path, PathBuf};

/// Which kind of input a problem was found in; it names the file in messages.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum InputKind {
    /// A run file (HDF5, layout `quassay-run`).
    Run,
    /// A noise record (JSON, format `quassay-noise`).
    NoiseRecord,
    /// A simulation scenario (JSON, format `quassay-scenario`).
    Scenario,
    /// A certificate (JSON, format `quassay-certificate`).
    Certificate,
    /// An array description (JSON, format `quassay-arrays`) with the arrays it names.
    Arrays,
}

impl InputKind {
    /// The words used for this kind of file in messages.
    pub fn describe(self) -> &'static str {
        match self {
            InputKind::Run => "run file",
            InputKind::NoiseRecord => "noise record",
            InputKind::Scenario => "scenario",
            InputKind::Certificate => "certificate",
            InputKind::Arrays => "array description",
        }
    }
}

/// One thing wrong with an input: where inside the file, and what (with the fix).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// HDF5 path or JSON pointer inside the file; `/` for the file as a whole.
    pub path: String,
    /// What is wrong and how to fix it, as one sentence without a final period.
    pub message: String,
}

impl Problem {
    /// A problem at `path` with `message`.
    pub fn new(path: impl Into<String>, message: impl Into<String>) -> Problem {
        Problem {
            path: path.into(),
            message: message.into(),
        }
    }
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.path, self.message)
    }
}

/// Everything quassay reports as a failure with exit code 1.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// An input file was read but its content is wrong; all problems found are listed.
    #[error("{}", render_input(*kind, file, problems))]
    Input {
        kind: InputKind,
        file: PathBuf,
        problems: Vec<Problem>,
    },
    /// A file could not be opened or read at all.
    #[error("cannot read '{}': {source}", path.display())]
    Read {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// An output could not be written; nothing was left behind.
    #[error("cannot write '{}': {message}", path.display())]
    Write { path: PathBuf, message: String },
    /// An output exists and `--force` was not given.
    #[error("'{}' already exists; pass --force to replace it, or choose another output path", path.display())]
    OutputExists { path: PathBuf },
    /// The options given are inconsistent with each other or with the inputs.
    #[error("{0}")]
    Options(String),
}

impl Error {
    /// An input error with a single problem.
    pub fn input(
        kind: InputKind,
        file: &Path,
        path: impl Into<String>,
        message: impl Into<String>,
    ) -> Error {
        Error::Input {
            kind,
            file: file.to_path_buf(),
            problems: vec![Problem::new(path, message)],
        }
    }

    /// The problems of an input error (empty for other errors).
    pub fn problems(&self) -> &[Problem] {
        match self {
            Error::Input { problems, .. } => problems,
            _ => &[],
        }
    }
}

fn render_input(kind: InputKind, file: &Path, problems: &[Problem]) -> String {
    let mut out = match problems.len() {
        1 => format!("{} '{}' has a problem:", kind.describe(), file.display()),
        n => format!("{} '{}' has {n} problems:", kind.describe(), file.display()),
    };
    for p in problems {
        out.push_str("\n  ");
        out.push_str(&p.to_string());
    }
    out
}

/// Result type of the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn input_error_lists_every_problem_with_its_path() {
        let e = Error::Input {
            kind: InputKind::Run,
            file: PathBuf::from("run.h5"),
            problems: vec![
                Problem::new("/times", "is missing; add a float64 vector of times"),
                Problem::new("/", "attribute `format` is missing"),
            ],
        };
        let text = e.to_string();
        assert!(text.starts_with("run file 'run.h5' has 2 problems:"));
        assert!(text.contains("\n  /times: is missing"));
        assert!(text.contains("\n  /: attribute `format` is missing"));
    }
}
