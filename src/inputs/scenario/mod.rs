//! Reader for simulation scenarios (JSON, format `quassay-scenario` v1, docs/scenario.md).
//!
//! A scenario describes an invented experiment completely: lattice, XXZ Hamiltonian with
//! fields, initial product state, times, observables, realizations, shots, seed, the declared
//! noise record (a `quassay-noise` body whose sources each also name their `operator`) and an
//! optional `true_noise` that the simulator draws from instead. Like every reader it collects
//! all problems of the file, each at a JSON pointer, before failing. The declared noise is
//! checked by the noise-record reader itself ([`crate::inputs::noise_record`]), after the
//! `operator` keys are taken out and each source's `operator_spectrum` is filled in from its
//! operator.
//!
//! The files: this one holds the checked scenario's types and limits; `reader` the problem
//! collector and its typed getters; `read` the entry points and the top level; `system` the
//! lattice, Hamiltonian, initial state and times; `observables` the observables; `noise` the
//! declared and true noise with their operators.

mod noise;
mod observables;
mod read;
mod system;

use crate::model::{FrequencyUnit, Lattice, NoiseRecord, TimeUnit};

pub use noise::instance_supports;
pub use read::{parse_scenario, read_scenario, scenario_from_value};
pub use system::staggered_sign;

/// Largest number of sites (2^20 amplitudes, 16 MiB per state vector).
pub const MAX_SITES: usize = 20;
/// Largest number of realizations.
pub const MAX_REALIZATIONS: usize = 100_000;
/// Largest number of recorded times.
pub const MAX_TIMES: usize = 10_000;
/// Largest number of observables.
pub const MAX_OBSERVABLES: usize = 64;
/// Largest `R · T · K` (values written to the run file).
pub const MAX_VALUES: usize = 10_000_000;
/// Largest number of evolutions `R · S` when the noise is redrawn every shot.
pub const MAX_SHOT_EVOLUTIONS: u64 = 1_000_000;
/// Largest number of shots per estimate.
pub const MAX_SHOTS: u64 = 1_000_000_000_000;
/// Largest number of evolutions of flipped initial states, `R · distinct patterns`, with a
/// preparation error and noise not redrawn every shot (checked once the patterns are drawn).
pub const MAX_PATTERN_EVOLUTIONS: u64 = 1_000_000;
/// Most windows per source before the last time when the noise is drawn again during an
/// evolution (`t_max/τ`): each is one more draw and one more operator per evolution.
pub const MAX_WINDOWS: f64 = 10_000.0;
/// Most sites of a scenario with device errors (density matrices of 4^n entries).
pub const MAX_DEVICE_SITES: usize = 8;

/// The value a scenario spells `text`, from a table of (value, spelling) pairs.
fn parse_label<T: Copy>(table: &[(T, &'static str)], text: &str) -> Option<T> {
    table.iter().find(|(_, s)| *s == text).map(|(v, _)| *v)
}

/// The spelling of `value` in a table of (value, spelling) pairs (`?` if it is missing).
fn label_of<T: Copy + PartialEq>(table: &[(T, &'static str)], value: T) -> &'static str {
    table
        .iter()
        .find(|(v, _)| *v == value)
        .map_or("?", |(_, s)| s)
}

/// A single-site state of the initial product state.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SiteState {
    /// `|0⟩`, Z = +1.
    Zero,
    /// `|1⟩`, Z = −1.
    One,
    /// `(|0⟩ + |1⟩)/√2`, X = +1.
    Plus,
    /// `(|0⟩ − |1⟩)/√2`, X = −1.
    Minus,
    /// `(|0⟩ + i|1⟩)/√2`, Y = +1.
    PlusI,
    /// `(|0⟩ − i|1⟩)/√2`, Y = −1.
    MinusI,
}

impl SiteState {
    /// Labels as written in scenarios.
    pub const ALL: [(SiteState, &'static str); 6] = [
        (SiteState::Zero, "0"),
        (SiteState::One, "1"),
        (SiteState::Plus, "+"),
        (SiteState::Minus, "-"),
        (SiteState::PlusI, "+i"),
        (SiteState::MinusI, "-i"),
    ];

    /// Parses a label.
    pub fn parse(text: &str) -> Option<SiteState> {
        parse_label(&Self::ALL, text)
    }

    /// The label.
    pub fn as_str(self) -> &'static str {
        label_of(&Self::ALL, self)
    }
}

/// A preparation error: in every shot, every site's initial single-site state has X applied
/// to it with probability `flip_probability`, independently of the other sites and shots.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PreparationError {
    /// q, from 0 to 1.
    pub flip_probability: f64,
}

impl SiteState {
    /// The state after X, up to a global phase: `|0⟩ ↔ |1⟩`, `|+i⟩ ↔ |−i⟩` (X|+i⟩ = i|−i⟩),
    /// `|±⟩` unchanged (X|−⟩ = −|−⟩).
    pub fn flipped(self) -> SiteState {
        match self {
            SiteState::Zero => SiteState::One,
            SiteState::One => SiteState::Zero,
            SiteState::PlusI => SiteState::MinusI,
            SiteState::MinusI => SiteState::PlusI,
            SiteState::Plus | SiteState::Minus => self,
        }
    }
}

/// The operator a noise source multiplies.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NoiseOperator {
    X,
    Y,
    Z,
    /// The projector `|1⟩⟨1| = (1 − Z)/2`.
    N,
    XX,
    YY,
    ZZ,
    /// `XX + YY` on two sites.
    XxPlusYy,
}

impl NoiseOperator {
    /// Spellings in scenarios.
    pub const ALL: [(NoiseOperator, &'static str); 8] = [
        (NoiseOperator::X, "X"),
        (NoiseOperator::Y, "Y"),
        (NoiseOperator::Z, "Z"),
        (NoiseOperator::N, "n"),
        (NoiseOperator::XX, "XX"),
        (NoiseOperator::YY, "YY"),
        (NoiseOperator::ZZ, "ZZ"),
        (NoiseOperator::XxPlusYy, "XX+YY"),
    ];

    /// Parses a spelling.
    pub fn parse(text: &str) -> Option<NoiseOperator> {
        parse_label(&Self::ALL, text)
    }

    /// The spelling.
    pub fn as_str(self) -> &'static str {
        label_of(&Self::ALL, self)
    }

    /// Number of sites the operator acts on.
    pub fn arity(self) -> usize {
        match self {
            NoiseOperator::X | NoiseOperator::Y | NoiseOperator::Z | NoiseOperator::N => 1,
            _ => 2,
        }
    }

    /// Its exact eigenvalue range (Paulis and their products ±1; n: 0, 1; XX+YY: −2, 0, 0, 2).
    pub fn spectrum(self) -> [f64; 2] {
        match self {
            NoiseOperator::N => [0.0, 1.0],
            NoiseOperator::XxPlusYy => [-2.0, 2.0],
            _ => [-1.0, 1.0],
        }
    }
}

/// One Pauli product of an observable, with its weight.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableTerm {
    /// Letters `X`, `Y`, `Z`, one per site.
    pub letters: String,
    /// Sites, distinct, in the order of the letters.
    pub sites: Vec<usize>,
    /// The weight `w_a`.
    pub weight: f64,
}

/// An observable: one Pauli product, or a weighted sum of products in one product basis.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableSpec {
    pub name: String,
    pub terms: Vec<ObservableTerm>,
    /// Whether it was given as a weighted sum (`over`), and is written with its terms.
    pub averaged: bool,
    /// Whether the run file declares its two outcomes (`two_outcomes`, a single product only).
    pub two_outcomes: bool,
}

/// A checked scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    pub run_id: String,
    /// The scenario's own description (the run's says in addition that the data are simulated).
    pub description: Option<String>,
    pub time_unit: TimeUnit,
    pub energy_unit: FrequencyUnit,
    pub lattice: Lattice,
    /// `J_e` per bond, in `energy_unit`.
    pub coupling: Vec<f64>,
    /// Whether `J` was given as one number.
    pub coupling_uniform: bool,
    /// Δ.
    pub anisotropy: f64,
    /// `hx_i` per site, in `energy_unit`.
    pub hx: Vec<f64>,
    /// `hz_i` per site, in `energy_unit`.
    pub hz: Vec<f64>,
    pub initial_state: Vec<SiteState>,
    /// Recorded times, in `time_unit`.
    pub times: Vec<f64>,
    /// Sorted by name.
    pub observables: Vec<ObservableSpec>,
    pub realizations: usize,
    pub shots: u64,
    pub seed: u64,
    /// The declared record (what noise.json says).
    pub noise: NoiseRecord,
    /// One operator per declared source.
    pub noise_operators: Vec<NoiseOperator>,
    /// The record the draws come from.
    pub true_noise: NoiseRecord,
    /// One operator per true source.
    pub true_operators: Vec<NoiseOperator>,
    /// The preparation error, if the scenario has the key `preparation_error`.
    pub preparation_error: Option<PreparationError>,
}

#[cfg(test)]
mod tests;
