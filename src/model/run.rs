//! The checked model of a run file (layout `quassay-run` v1, docs/run-format.md).
//!
//! Values are held as `f64` whatever their type on disk (a float32 value converts exactly), and
//! frequencies are kept as given together with their unit; [`Hamiltonian::bond_norms_angular`]
//! converts them to radians per the run's time unit, the only form the bounds use.

use ndarray::Array2;

use super::lattice::Lattice;
use super::units::{FrequencyUnit, TimeUnit};

/// A run, as read and checked.
#[derive(Debug, Clone, PartialEq)]
pub struct Run {
    /// The lab's identifier for the run.
    pub run_id: String,
    /// The unit of `times`.
    pub time_unit: TimeUnit,
    /// Free text, if given.
    pub description: Option<String>,
    /// Times since the start of the evolution: finite, non-negative, non-decreasing.
    pub times: Vec<f64>,
    /// The lattice (its `n_sites` is the run's `n_sites`).
    pub lattice: Lattice,
    /// What the run says of its target Hamiltonian.
    pub hamiltonian: Hamiltonian,
    /// The observables, in the order of their names (sorted bytewise).
    pub observables: Vec<Observable>,
}

impl Run {
    /// Number of sites.
    pub fn n_sites(&self) -> usize {
        self.lattice.n_sites()
    }

    /// Number of recorded times.
    pub fn n_times(&self) -> usize {
        self.times.len()
    }

    /// Number of realizations (the same for every observable; 0 if there are none).
    pub fn n_realizations(&self) -> usize {
        self.observables.first().map_or(0, |o| o.values.nrows())
    }
}

/// Norm bounds of the target Hamiltonian's bond terms.
#[derive(Debug, Clone, PartialEq)]
pub struct Hamiltonian {
    /// Unit of `bond_norm_max` and `bond_norms`.
    pub energy_unit: FrequencyUnit,
    /// The largest norm of one bond term after removing its identity part.
    pub bond_norm_max: f64,
    /// Per-bond norms (same order as the lattice's bonds), if given.
    pub bond_norms: Option<Vec<f64>>,
    /// Range of the couplings, in bonds; the light-cone bounds support only 1.
    pub interaction_range: u32,
}

impl Hamiltonian {
    /// The norm bound of every bond in radians per `time_unit`, in bond order.
    pub fn bond_norms_angular(&self, n_bonds: usize, time_unit: TimeUnit) -> Vec<f64> {
        let factor = self.energy_unit.factor_to_angular(time_unit);
        match &self.bond_norms {
            Some(v) => v.iter().map(|x| x * factor).collect(),
            None => vec![self.bond_norm_max * factor; n_bonds],
        }
    }
}

/// Shots behind each estimate.
#[derive(Debug, Clone, PartialEq)]
pub enum Shots {
    /// The same number of shots at every point (attribute `shots`).
    Uniform(u64),
    /// Shots per realization and time (dataset `shots`, R × T).
    PerPoint(Array2<u64>),
}

impl Shots {
    /// Shots at realization `r`, time index `k`.
    pub fn at(&self, r: usize, k: usize) -> u64 {
        match self {
            Shots::Uniform(s) => *s,
            Shots::PerPoint(a) => a[[r, k]],
        }
    }
}

/// The count of outcomes at `spectrum_max` behind a value `x` that is the mean of `shots`
/// outcomes each equal to `lo` or `hi` (a two-outcome observable, docs/run-format.md):
/// `k = shots·(x − lo)/(hi − lo)` rounded to the nearest integer within `[0, shots]`, and the
/// distance of the unrounded count from it (0 for a value formed exactly from a count, a few
/// ulps of `shots` after rounding).
pub fn outcome_count(x: f64, shots: u64, lo: f64, hi: f64) -> (u64, f64) {
    let n = shots as f64;
    let y = n * ((x - lo) / (hi - lo));
    let k = y.round().clamp(0.0, n);
    (k as u64, (y - k).abs())
}

/// An observable that is a weighted sum of local terms, `O = Σ_a w_a O_a`.
#[derive(Debug, Clone, PartialEq)]
pub struct Terms {
    /// Sites of each term (padding removed).
    pub supports: Vec<Vec<usize>>,
    /// The weights `w_a`.
    pub weights: Vec<f64>,
    /// Eigenvalue range `[min, max]` of each `O_a`.
    pub spectra: Vec<[f64; 2]>,
}

/// One observable of a run.
#[derive(Debug, Clone, PartialEq)]
pub struct Observable {
    /// Its name (letters, digits, `_`, `-`, `.`).
    pub name: String,
    /// Estimates of ⟨O⟩, realizations × times.
    pub values: Array2<f64>,
    /// Shots behind each estimate.
    pub shots: Shots,
    /// Standard errors (R × T), if given.
    pub stderr: Option<Array2<f64>>,
    /// Ideal-model prediction per time, if known.
    pub ideal: Option<Vec<f64>>,
    /// Sites the observable acts on, sorted and without repeats; empty means global.
    pub support: Vec<usize>,
    /// Smallest eigenvalue of O.
    pub spectrum_min: f64,
    /// Largest eigenvalue of O.
    pub spectrum_max: f64,
    /// Free text (e.g. the Pauli string), if given.
    pub description: Option<String>,
    /// The term structure, if given.
    pub terms: Option<Terms>,
    /// Whether the run file declares every shot's outcome to be `spectrum_min` or
    /// `spectrum_max` (attribute `two_outcomes = 1`, docs/run-format.md), so that each value is
    /// a count of outcomes over its shots.
    pub two_outcomes: bool,
}

impl Observable {
    /// `spread(O) = λmax − λmin`.
    pub fn spread(&self) -> f64 {
        self.spectrum_max - self.spectrum_min
    }

    /// Whether the observable acts on the whole system (no support given).
    pub fn is_global(&self) -> bool {
        self.support.is_empty()
    }
}
