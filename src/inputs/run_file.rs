//! Reader for run files (HDF5, layout `quassay-run` v1; docs/run-format.md).
//!
//! [`inspect_run`] reads everything it can, collects every problem of the layout (each with its
//! HDF5 path and the fix) and a summary of what it found; [`read_run`] is the same but returns
//! the checked [`Run`] or fails with all the problems at once. The file is opened read-only and
//! never written. HDF5's own error printing is silenced: every failure becomes a [`Problem`].
//!
//! The pieces: `access` (typed reads that tolerate the usual storage variants), `checks` (the
//! pure rules), `layout` (root, times, lattice, Hamiltonian), `observables` and `stream`.
//!
//! [`open_run`] is the streaming form that `certify` uses: it reads and checks everything but
//! the observables, then [`RunStream::read_observables`] reads them one at a time in row
//! blocks, handing each one's sums to a callback and its content to a [`ContentSink`], so that
//! memory does not grow with the size of the run. All three share the same code, so they find
//! the same problems.

mod access;
pub(crate) mod checks;
mod layout;
mod observables;
mod stream;

use std::path::{Path, PathBuf};

use serde::Serialize;

use crate::error::{Error, InputKind, Problem, Result};
use crate::model::Run;

pub use checks::{range_tolerance, valid_name};
pub use observables::recycle_storage;
pub use stream::{ContentSink, NoContent, ObservableOutline, ObservableRead, RunOutline};

/// What `inspect` shows of a run file: whatever could be read, even from a file with problems.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct RunSummary {
    /// Root attribute `format`.
    pub format: Option<String>,
    /// Root attribute `format_version`.
    pub format_version: Option<i64>,
    /// Root attribute `run_id`.
    pub run_id: Option<String>,
    /// Root attribute `description`.
    pub description: Option<String>,
    /// Root attribute `time_unit`, as written.
    pub time_unit: Option<String>,
    /// Root attribute `n_sites`.
    pub n_sites: Option<u64>,
    /// `/lattice`.
    pub lattice: LatticeSummary,
    /// `/times`.
    pub times: Option<TimesSummary>,
    /// Realizations R (rows of `values`) of the first observable that has readable values.
    pub realizations: Option<usize>,
    /// `/hamiltonian`.
    pub hamiltonian: HamiltonianSummary,
    /// The observables, sorted by name.
    pub observables: Vec<ObservableSummary>,
}

/// What was read of `/lattice`.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct LatticeSummary {
    pub geometry: Option<String>,
    pub shape: Option<Vec<u64>>,
    pub boundary: Option<String>,
    /// Number of bonds (from the geometry, or the rows of `/lattice/bonds` for a graph).
    pub n_bonds: Option<usize>,
    /// Whether `/lattice/bonds` is present.
    pub bonds_stored: bool,
}

/// What was read of `/times`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TimesSummary {
    /// T, the number of times.
    pub count: usize,
    pub first: Option<f64>,
    pub last: Option<f64>,
    /// `float64`, `float32`, ...
    pub stored_as: String,
}

/// What was read of `/hamiltonian`.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct HamiltonianSummary {
    pub energy_unit: Option<String>,
    pub bond_norm_max: Option<f64>,
    /// `[smallest, largest]` of `/hamiltonian/bond_norms`, if present.
    pub bond_norms_range: Option<[f64; 2]>,
    /// The value in force (1 when the attribute is absent).
    pub interaction_range: Option<i64>,
}

/// What was read of one `/observables/<name>` group.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct ObservableSummary {
    pub name: String,
    /// `[R, T]` of `values`.
    pub shape: Option<[usize; 2]>,
    /// `float64`, `float32`, ... of `values`.
    pub stored_as: Option<String>,
    /// Sites (sorted); empty means global.
    pub support: Option<Vec<usize>>,
    pub spectrum_min: Option<f64>,
    pub spectrum_max: Option<f64>,
    pub shots: Option<ShotsSummary>,
    pub has_stderr: bool,
    pub has_ideal: bool,
    /// Number of terms A, when a term structure is present.
    pub terms: Option<usize>,
    pub description: Option<String>,
    /// Whether every shot's outcome is declared to be `spectrum_min` or `spectrum_max`
    /// (written only when declared, so earlier `inspect --json` outputs keep their bytes).
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub two_outcomes: bool,
}

/// Shots of one observable: one attribute, or a dataset and its range.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ShotsSummary {
    /// Whether shots are given per point (dataset) rather than once (attribute).
    pub per_point: bool,
    pub min: i64,
    pub max: i64,
}

/// The result of reading a run file as far as possible.
#[derive(Debug, Clone)]
pub struct RunInspection {
    /// The file read.
    pub file: PathBuf,
    /// Whatever could be read.
    pub summary: RunSummary,
    /// Every problem of the layout, in reading order.
    pub problems: Vec<Problem>,
    /// Items that are not part of layout v1 and were ignored (not errors).
    pub notes: Vec<Problem>,
    /// The checked run, when there are no problems.
    pub run: Option<Run>,
}

impl RunInspection {
    /// The checked run, or [`Error::Input`] with every problem.
    pub fn into_run(self) -> Result<Run> {
        match self.run {
            Some(run) if self.problems.is_empty() => Ok(run),
            _ => Err(Error::Input {
                kind: InputKind::Run,
                file: self.file,
                problems: self.problems,
            }),
        }
    }
}

/// Reads and checks a run file; fails with every problem of its layout at once.
pub fn read_run(path: &Path) -> Result<Run> {
    inspect_run(path)?.into_run()
}

/// Reads a run file as far as possible, collecting every problem.
///
/// Fails only if the file cannot be opened as HDF5 at all: [`Error::Read`] for a missing or
/// unreadable path, a folder, a FIFO or a device, [`Error::Input`] (one problem at `/`) for a file that is empty
/// or not HDF5.
pub fn inspect_run(path: &Path) -> Result<RunInspection> {
    let stream = open_run(path)?;
    let mut observables = Vec::new();
    let (outline, mut inspection) = stream.finish(true, &mut NoContent, &mut |o| {
        if let Some(kept) = o.kept {
            observables.push(kept);
        }
    });
    let run = outline.map(|o| Run {
        run_id: o.run_id,
        time_unit: o.time_unit,
        description: o.description,
        times: o.times,
        lattice: o.lattice,
        hamiltonian: o.hamiltonian,
        observables,
    });
    inspection.run = run.filter(|_| inspection.problems.is_empty());
    Ok(inspection)
}

/// A run file opened for streaming: everything but the observables is read and checked.
pub struct RunStream {
    file: hdf5::File,
    path: PathBuf,
    c: access::Collector,
    summary: RunSummary,
    outline: Option<RunOutline>,
    ctx: observables::Context,
    listing: Option<(hdf5::Group, Vec<String>)>,
}

/// Opens a run file for streaming (fails like [`inspect_run`] when it is not HDF5).
pub fn open_run(path: &Path) -> Result<RunStream> {
    let file = open(path)?;
    let mut c = access::Collector::default();
    let mut summary = RunSummary::default();
    let (outline, ctx) = layout::read_header(&mut c, &file, &mut summary);
    let listing = observables::list_observables(&mut c, &file);
    Ok(RunStream {
        file,
        path: path.to_path_buf(),
        c,
        summary,
        outline,
        ctx,
        listing,
    })
}

impl RunStream {
    /// The run without its observables, when everything read so far is sound.
    pub fn outline(&self) -> Option<&RunOutline> {
        self.outline.as_ref().filter(|_| self.c.problems.is_empty())
    }

    /// The names of the observables the file lists, in name order.
    pub fn observable_names(&self) -> &[String] {
        self.listing.as_ref().map_or(&[], |(_, n)| n.as_slice())
    }

    /// The number of observables the file lists (all of them are read, sound or not).
    pub fn n_observables(&self) -> usize {
        self.listing.as_ref().map_or(0, |(_, n)| n.len())
    }

    /// Reads the observables in name order, one at a time: each sound one is handed to `visit`
    /// (its data summed, not kept) and its R × T content to `sink`. Returns the complete
    /// outline, or [`Error::Input`] with every problem of the file.
    pub fn read_observables(
        self,
        sink: &mut dyn ContentSink,
        mut visit: impl FnMut(ObservableRead),
    ) -> Result<RunOutline> {
        self.read_checked(false, sink, &mut visit)
    }

    /// As [`RunStream::read_observables`], but each observable is handed to `visit` whole
    /// (`kept` is `Some`), one at a time, and dropped after the visit: memory holds one
    /// observable's R × T datasets, not the run's.
    pub fn read_observables_whole(
        self,
        sink: &mut dyn ContentSink,
        mut visit: impl FnMut(ObservableRead),
    ) -> Result<RunOutline> {
        self.read_checked(true, sink, &mut visit)
    }

    /// Reads the observables (kept whole or not) and turns any problem into [`Error::Input`].
    fn read_checked(
        self,
        keep: bool,
        sink: &mut dyn ContentSink,
        visit: &mut dyn FnMut(ObservableRead),
    ) -> Result<RunOutline> {
        let (outline, inspection) = self.finish(keep, sink, visit);
        match outline {
            Some(o) if inspection.problems.is_empty() => Ok(o),
            _ => Err(Error::Input {
                kind: InputKind::Run,
                file: inspection.file,
                problems: inspection.problems,
            }),
        }
    }

    /// The realizations R of the first listed observable, from its `values` dataset's shape
    /// (metadata only, before any value is read); `None` if it cannot be read (the layout
    /// checks then report why).
    pub fn first_realizations(&self) -> Option<usize> {
        let (g, names) = self.listing.as_ref()?;
        let d = g.dataset(&format!("{}/values", names.first()?)).ok()?;
        d.shape().first().copied()
    }

    /// Whether some listed observable declares two outcomes (`two_outcomes = 1`; a cheap look at
    /// the attributes, before any value is read, through the same reader as the layout checks,
    /// which report a malformed attribute).
    pub fn any_two_outcomes(&self) -> bool {
        self.listing.as_ref().is_some_and(|(g, names)| {
            names.iter().any(|n| {
                g.group(n).is_ok_and(|o| {
                    let mut ignored = access::Collector::default();
                    access::int_attr(&mut ignored, &o, n, "two_outcomes", None) == Some(1)
                })
            })
        })
    }

    /// How many of the listed observables have an `ideal` dataset (a cheap look at the links,
    /// before anything is read).
    pub fn n_with_ideal(&self) -> usize {
        self.listing.as_ref().map_or(0, |(g, names)| {
            names
                .iter()
                .filter(|n| g.link_exists(&format!("{n}/ideal")))
                .count()
        })
    }

    /// Reads the observables; the outline is `Some` only when the whole file is sound.
    fn finish(
        mut self,
        keep: bool,
        sink: &mut dyn ContentSink,
        visit: &mut dyn FnMut(ObservableRead),
    ) -> (Option<RunOutline>, RunInspection) {
        let read = match &self.listing {
            Some((g, names)) => observables::read_observables(
                &mut self.c,
                g,
                names,
                &self.ctx,
                &mut self.summary,
                keep,
                sink,
                visit,
            ),
            None => None,
        };
        drop(self.listing);
        drop(self.file);
        let mut c = self.c;
        let outline = match (self.outline, read) {
            (Some(mut o), Some((list, r))) if c.problems.is_empty() => {
                o.observables = list;
                o.realizations = r;
                Some(o)
            }
            _ => None,
        };
        if c.problems.is_empty() && outline.is_none() {
            c.problem(
                "/",
                "could not be read completely; please report this as a bug in quassay",
            );
        }
        let inspection = RunInspection {
            file: self.path,
            summary: self.summary,
            problems: c.problems,
            notes: c.notes,
            run: None,
        };
        (outline, inspection)
    }
}

/// What a run file is, for messages about a path that is not one.
const RUN_FILE: &str = "a run file (HDF5, layout quassay-run v1)";

/// Opens `path` read-only as HDF5, with the failures a user can cause told apart.
fn open(path: &Path) -> Result<hdf5::File> {
    hdf5::silence_errors(true);
    // A folder, FIFO or device is refused before HDF5 opens the path (a FIFO would block the
    // open forever); opening it here also tells a permission problem from a format problem.
    let len = crate::inputs::regular::check_regular(path, RUN_FILE)?;
    let not_run = |message: String| Error::input(InputKind::Run, path, "/", message);
    if len == 0 {
        return Err(not_run(
            "the file is empty (0 bytes), so it is not an HDF5 run file; was it copied or written completely?"
                .to_string(),
        ));
    }
    // Read-only and without HDF5's file lock: quassay never writes the file, and a lock held
    // elsewhere (a writer, or a descriptor inherited by another process) or a file system
    // without locks must not stop it from reading.
    hdf5::File::with_options()
        .with_fapl(|p| p.file_locking(false))
        .open(path)
        .map_err(|e| {
            let words = e.to_string();
            if words.contains("truncated file") {
                // HDF5 compares the file's size with the end address its superblock records.
                not_run(format!(
                    "is truncated: it has {len} bytes, fewer than its HDF5 superblock records (HDF5 says: {words}); copy the file again completely from its source"
                ))
            } else if words.contains("signature not found") {
                not_run(format!(
                    "is not an HDF5 file: it does not start with the HDF5 signature (HDF5 says: {words}); give a run file written in HDF5 layout quassay-run v1 (see docs/run-format.md)"
                ))
            } else {
                not_run(format!(
                    "is not an HDF5 file that can be opened (HDF5 says: {words}); the file may be damaged: copy it again from its source, or give a run file written in HDF5 layout quassay-run v1 (see docs/run-format.md)"
                ))
            }
        })
}
