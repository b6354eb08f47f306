//! What the streaming read of a run file hands out: the run without its observables' big
//! datasets ([`RunOutline`]), each observable's sums as it is read ([`ObservableRead`]), and
//! the content of every big dataset block by block to a [`ContentSink`] (the certificate's
//! content digests). Memory stays at one row block (about 1 MiB) per dataset plus per-time
//! sums, whatever R × T × K.

use crate::inputs::digest::ContentKind;
use crate::model::sums::ObservableSums;
use crate::model::{Hamiltonian, Lattice, Observable, Run, Terms, TimeUnit};

/// Receives the numeric content of the observables' R × T datasets (`values`, `shots`,
/// `stderr`, in that order per observable) in row-major order, as the reader reads it (except
/// what [`ContentSink::takes_kept_floats`] leaves to the caller).
/// `begin` and `end` always come in pairs, even when a read fails half-way.
pub trait ContentSink {
    /// A dataset starts: its HDF5 path, kind and shape.
    fn begin(&mut self, path: &str, kind: ContentKind, shape: &[usize]);
    /// The next values of a float dataset (float32 converted exactly).
    fn floats(&mut self, values: &[f64]);
    /// The same, handing over the block (a sink on another thread can take it without a copy).
    fn floats_owned(&mut self, values: Vec<f64>) {
        self.floats(&values);
    }
    /// The next values of an integer dataset.
    fn ints(&mut self, values: &[i64]);
    /// The dataset is complete.
    fn end(&mut self);
    /// Whether the sink takes the float datasets that the reader keeps whole (`values` and
    /// `stderr`, when the caller asked for whole observables) from the kept arrays after the
    /// reader is done with them, instead of block by block. The reader then reads such a
    /// dataset straight into the kept array, with no copy, and passes nothing of it here;
    /// the caller hands the arrays to the sink itself (`certify` does, once the checks of the
    /// observable are done).
    fn takes_kept_floats(&self) -> bool {
        false
    }
}

/// A sink that drops the content.
pub struct NoContent;

impl ContentSink for NoContent {
    fn begin(&mut self, _: &str, _: ContentKind, _: &[usize]) {}
    fn floats(&mut self, _: &[f64]) {}
    fn ints(&mut self, _: &[i64]) {}
    fn end(&mut self) {}
}

/// A run as read and checked, without the observables' R × T datasets.
#[derive(Debug, Clone, PartialEq)]
pub struct RunOutline {
    pub run_id: String,
    pub time_unit: TimeUnit,
    pub description: Option<String>,
    pub times: Vec<f64>,
    pub lattice: Lattice,
    pub hamiltonian: Hamiltonian,
    /// R, the same for every observable (0 before the observables are read).
    pub realizations: usize,
    /// The observables, in name order (empty before they are read).
    pub observables: Vec<ObservableOutline>,
}

impl RunOutline {
    /// The outline of a run held in memory.
    pub fn of(run: &Run) -> RunOutline {
        RunOutline {
            run_id: run.run_id.clone(),
            time_unit: run.time_unit,
            description: run.description.clone(),
            times: run.times.clone(),
            lattice: run.lattice.clone(),
            hamiltonian: run.hamiltonian.clone(),
            realizations: run.n_realizations(),
            observables: run.observables.iter().map(ObservableOutline::of).collect(),
        }
    }

    /// Number of sites.
    pub fn n_sites(&self) -> usize {
        self.lattice.n_sites()
    }

    /// Number of recorded times.
    pub fn n_times(&self) -> usize {
        self.times.len()
    }

    /// Number of realizations.
    pub fn n_realizations(&self) -> usize {
        self.realizations
    }
}

/// One observable without its R × T datasets.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableOutline {
    pub name: String,
    pub support: Vec<usize>,
    pub spectrum_min: f64,
    pub spectrum_max: f64,
    pub description: Option<String>,
    pub terms: Option<Terms>,
    /// The ideal prediction per time (T values), if given.
    pub ideal: Option<Vec<f64>>,
    /// Whether `shots` is a dataset (rather than one attribute).
    pub per_point_shots: bool,
    /// Whether `stderr` is given.
    pub has_stderr: bool,
    /// Whether every shot's outcome is declared to be one of the spectrum's two ends.
    pub two_outcomes: bool,
}

impl ObservableOutline {
    /// The outline of an observable held in memory.
    pub fn of(o: &Observable) -> ObservableOutline {
        ObservableOutline {
            name: o.name.clone(),
            support: o.support.clone(),
            spectrum_min: o.spectrum_min,
            spectrum_max: o.spectrum_max,
            description: o.description.clone(),
            terms: o.terms.clone(),
            ideal: o.ideal.clone(),
            per_point_shots: matches!(o.shots, crate::model::Shots::PerPoint(_)),
            has_stderr: o.stderr.is_some(),
            two_outcomes: o.two_outcomes,
        }
    }

    /// `spread(O) = λmax − λmin`.
    pub fn spread(&self) -> f64 {
        self.spectrum_max - self.spectrum_min
    }
}

/// One sound observable as the streaming read hands it over.
#[derive(Debug, Clone)]
pub struct ObservableRead {
    pub outline: ObservableOutline,
    /// What the bounds need of its data.
    pub sums: ObservableSums,
    /// The whole observable, when the reader was asked to keep it (`read_run`).
    pub kept: Option<Observable>,
}
