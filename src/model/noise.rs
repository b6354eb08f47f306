//! The noise record (format `quassay-noise` v1) and its expansion into instances.
//!
//! A [`NoiseRecord`] is what the JSON file says, checked but not yet tied to a run. Expanding it
//! against a run's lattice and time unit gives a [`NoiseModel`]: one [`Instance`] per site, bond
//! or listed support, each with its amplitude `δ_i` in radians per the run's time unit, already
//! multiplied by half the spread of the operator it multiplies (bounds.md §1), so that the
//! centred operator has norm at most 1.

use super::units::FrequencyUnit;

/// How often the random part `g` of the noise is drawn again (bounds.md §1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Redrawn {
    EveryShot,
    EveryRealization,
    Once,
}

impl Redrawn {
    /// The spelling used in files.
    pub fn as_str(self) -> &'static str {
        match self {
            Redrawn::EveryShot => "every_shot",
            Redrawn::EveryRealization => "every_realization",
            Redrawn::Once => "once",
        }
    }

    /// Parses the spelling used in files.
    pub fn parse(text: &str) -> Option<Redrawn> {
        [Redrawn::EveryShot, Redrawn::EveryRealization, Redrawn::Once]
            .into_iter()
            .find(|r| r.as_str() == text)
    }
}

/// The distribution family of the dimensionless, zero-mean random variable `g` of one source.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Family {
    /// Uniform on [−1, 1].
    Uniform,
    /// Normal with standard deviation `sigma`.
    Normal { sigma: f64 },
    /// Normal with parameter `sigma`, restricted to [−cutoff, cutoff] and renormalised.
    TruncatedNormal { sigma: f64, cutoff: f64 },
    /// ±1 with probability 1/2 each.
    TwoPoint,
    /// Any zero-mean law on [lower, upper] with standard deviation at most `std`.
    Bounded {
        lower: f64,
        upper: f64,
        std: f64,
        symmetric: bool,
    },
}

impl Family {
    /// The spelling of the family in files.
    pub fn name(&self) -> &'static str {
        match self {
            Family::Uniform => "uniform",
            Family::Normal { .. } => "normal",
            Family::TruncatedNormal { .. } => "truncated_normal",
            Family::TwoPoint => "two_point",
            Family::Bounded { .. } => "bounded",
        }
    }
}

/// Where a source acts.
#[derive(Debug, Clone, PartialEq)]
pub enum ActsOn {
    /// One instance per site, in site order.
    EachSite,
    /// One instance per bond, in the lattice's bond order.
    EachBond,
    /// One instance per listed support.
    Sites(Vec<Vec<usize>>),
}

/// The amplitude of a source: one value for all instances, or one per instance.
#[derive(Debug, Clone, PartialEq)]
pub enum Amplitude {
    Scalar(f64),
    PerInstance(Vec<f64>),
}

/// One source of the record, as written (amplitude in the record's frequency unit).
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseSource {
    pub name: String,
    pub acts_on: ActsOn,
    /// Eigenvalue range `[min, max]` of the operator the source multiplies.
    pub operator_spectrum: [f64; 2],
    pub amplitude: Amplitude,
    pub family: Family,
    /// Known systematic offset μ, in units of the amplitude.
    pub mean_offset: f64,
    /// Uncertainty u of the offset, in units of the amplitude.
    pub mean_offset_uncertainty: f64,
}

/// Free-text calibration information, carried into the certificate unchanged.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Calibration {
    pub method: Option<String>,
    pub date: Option<String>,
    pub notes: Option<String>,
}

/// A noise record, checked on its own (not yet against a run).
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseRecord {
    pub frequency_unit: FrequencyUnit,
    pub redrawn: Redrawn,
    pub sources: Vec<NoiseSource>,
    pub calibration: Option<Calibration>,
}

/// One expanded noise source: a single site, bond or listed support.
#[derive(Debug, Clone, PartialEq)]
pub struct Instance {
    /// Index of the source in the record.
    pub source: usize,
    /// Sites the instance acts on (sorted, no repeats).
    pub support: Vec<usize>,
    /// The bond index, for `each_bond` instances.
    pub bond: Option<usize>,
    /// `δ_i`: amplitude × spread(V)/2, in radians per the run's time unit; ≥ 0, finite.
    pub delta: f64,
    pub family: Family,
    /// μ_i (dimensionless).
    pub mean_offset: f64,
    /// u_i (dimensionless, ≥ 0).
    pub mean_offset_uncertainty: f64,
}

impl Instance {
    /// `m_i = |μ_i| + u_i` (bounds.md §1).
    pub fn systematic(&self) -> f64 {
        self.mean_offset.abs() + self.mean_offset_uncertainty
    }
}

/// A noise record expanded against a run.
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseModel {
    pub redrawn: Redrawn,
    pub instances: Vec<Instance>,
}
