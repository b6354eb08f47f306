//! The checked, typed model of a run: units, lattice, Hamiltonian data, observables and noise.
//!
//! Everything in here has passed the readers' checks, so the bounds can rely on it without
//! re-validating: times are finite and non-decreasing, spectra are ordered, supports are in
//! range, amplitudes are finite and non-negative, and every frequency is in radians per the
//! run's time unit.

pub mod device;
pub mod lattice;
pub mod noise;
pub mod run;
pub mod sums;
pub mod units;

pub use lattice::{Boundary, Geometry, Lattice};
pub use noise::{ActsOn, Family, Instance, NoiseModel, NoiseRecord, NoiseSource, Redrawn};
pub use run::{outcome_count, Hamiltonian, Observable, Run, Shots, Terms};
pub use units::{FrequencyUnit, TimeUnit};
