//! `quassay assemble`: a run file from a lab's own NumPy arrays and a small description.
//!
//! Reads the description and every array it names, checks them all (every problem named with
//! its array and the fix, nothing written on any problem), writes the run file to a temporary
//! file beside the output, reads that back with `inspect`'s reader as a last gate, and only
//! then moves it into place. Supports are stored as datasets (the form HDF5 accepts at any
//! size, docs/run-format.md "Large supports").

use std::fmt::Write as _;
use std::path::PathBuf;

use clap::Args;

use super::{print_stdout, Outcome};
use crate::error::{Error, InputKind, Problem, Result};
use crate::inputs::arrays::read_description;
use crate::inputs::run_file::inspect_run;
use crate::outputs::atomic::write_file_named;
use crate::outputs::run_file::{write_run, Compression, FloatWidth, WriteOptions};

/// `quassay assemble DESCRIPTION.json -o RUN.h5`.
#[derive(Debug, Args)]
pub struct AssembleArgs {
    /// The array description (JSON, format quassay-arrays v1, docs/assemble.md); array files
    /// are found relative to its folder.
    pub description: PathBuf,
    /// The run file to write (HDF5, layout quassay-run v1).
    #[arg(short = 'o', long = "output")]
    pub output: PathBuf,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
}

/// Runs `assemble`.
pub fn run(args: &AssembleArgs) -> Result<Outcome> {
    let assembled = read_description(&args.description)?;
    let run = &assembled.run;
    let options = WriteOptions {
        // float32 only when every float array came as float32: then storing float32 is exact.
        values: if assembled.all_float32 {
            FloatWidth::F32
        } else {
            FloatWidth::F64
        },
        compression: Compression::Gzip {
            level: 4,
            shuffle: true,
        },
        support_dataset: true,
    };
    write_file_named(&args.output, args.force, |tmp| {
        write_run(tmp, run, &options)?;
        let inspection = inspect_run(tmp)?;
        if !inspection.problems.is_empty() {
            return Err(Error::Input {
                kind: InputKind::Arrays,
                file: args.description.clone(),
                problems: inspection
                    .problems
                    .into_iter()
                    .map(|p| {
                        Problem::new(
                            format!("(run file item {})", p.path),
                            format!("{}; nothing was written", p.message),
                        )
                    })
                    .collect(),
            });
        }
        if inspection.run.as_ref() != Some(run) {
            return Err(Error::Write {
                path: args.output.clone(),
                message: "the written file does not read back as the assembled run; nothing was written (please report this as a bug in quassay)".into(),
            });
        }
        Ok(())
    })?;
    let mut out = String::new();
    let r = run.observables.first().map_or(0, |o| o.values.nrows());
    let _ = writeln!(
        out,
        "assembled '{}' from '{}' and {} array file(s): run '{}', {} sites ({} {}), {} times \
         from {} to {} {}, {} observables, {} realizations; inspect finds no problem",
        args.output.display(),
        args.description.display(),
        assembled.files.len(),
        run.run_id,
        run.lattice.n_sites(),
        run.lattice.geometry().as_str(),
        run.lattice.boundary().as_str(),
        run.times.len(),
        crate::numbers::short(run.times[0]),
        crate::numbers::short(run.times[run.times.len() - 1]),
        run.time_unit.as_str(),
        run.observables.len(),
        r,
    );
    print_stdout(&out)?;
    Ok(Outcome::Success)
}
