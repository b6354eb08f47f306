//! The noise record (format `quassay-noise` v1, v2 and v3) and its expansion into instances.
//!
//! A [`NoiseRecord`] is what the JSON file says, checked but not yet tied to a run. Expanding it
//! against a run's lattice and time unit gives a [`NoiseModel`]: one [`Instance`] per site, bond
//! or listed support, each with its amplitude `δ_i` in radians per the run's time unit, already
//! multiplied by half the spread of the operator it multiplies (docs/method.md §1), so that the
//! centred operator has norm at most 1.

use super::device::{DeviceModel, DeviceRecord};
use super::lattice::Lattice;
use super::units::{FrequencyUnit, TimeUnit};
use crate::Problem;

/// How often the random part `g` of the noise is drawn again (docs/method.md §1).
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
    /// Correlation time τ of a source whose draw changes during an evolution (format version
    /// 3): the noise is constant on the windows `[kτ, (k+1)τ)` from t = 0 and drawn
    /// independently in each (docs/method.md §1, "Noise that changes during a run"). `None`:
    /// one draw per evolution.
    pub correlation_time: Option<(f64, TimeUnit)>,
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
    /// The record's `format_version` (1; 2 with device sections allowed; 3 with correlation
    /// times allowed as well).
    pub format_version: u64,
    /// The device sections (version 2; all absent otherwise).
    pub device: DeviceRecord,
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
    /// The correlation time τ in the run's time unit (> 0), or `None` for one draw per
    /// evolution.
    pub correlation_time: Option<f64>,
}

impl Instance {
    /// `m_i = |μ_i| + u_i` (docs/method.md §1).
    pub fn systematic(&self) -> f64 {
        self.mean_offset.abs() + self.mean_offset_uncertainty
    }
}

/// A noise record expanded against a run.
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseModel {
    pub redrawn: Redrawn,
    pub instances: Vec<Instance>,
    /// The device errors, one number per site (empty for a record without device sections).
    pub device: DeviceModel,
}

impl NoiseSource {
    /// Half the spread of the operator the source multiplies, `(max − min)/2` (docs/method.md §1).
    pub fn half_spread(&self) -> f64 {
        0.5 * (self.operator_spectrum[1] - self.operator_spectrum[0])
    }
}

impl NoiseRecord {
    /// Expands the record against a run's lattice and time unit.
    ///
    /// One [`Instance`] per site (`each_site`, in site order), per bond (`each_bond`, in the
    /// lattice's bond order) or per listed support, source after source. Each instance gets
    /// `δ = A' · (max − min)/2` with `A' = frequency_unit.to_angular(A, time_unit)`: the
    /// amplitude is converted first, then multiplied by the half spread, in that order, so the
    /// result is reproducible to the bit. Problems name JSON pointers into the record:
    /// `each_bond` on a lattice without bonds, a listed site `≥ n_sites`, an amplitude array
    /// whose length is not the number of instances, a δ that is not finite and ≥ 0.
    pub fn expand(
        &self,
        lattice: &Lattice,
        time_unit: TimeUnit,
    ) -> Result<NoiseModel, Vec<Problem>> {
        let mut problems = Vec::new();
        let mut instances = Vec::new();
        for (index, source) in self.sources.iter().enumerate() {
            let path = format!("/sources/{index}");
            let Some(supports) = supports_of(source, lattice, &path, &mut problems) else {
                continue;
            };
            let amplitudes: Vec<f64> = match &source.amplitude {
                Amplitude::Scalar(a) => vec![*a; supports.len()],
                Amplitude::PerInstance(v) if v.len() == supports.len() => v.clone(),
                Amplitude::PerInstance(v) => {
                    problems.push(Problem::new(
                        format!("{path}/amplitude"),
                        format!(
                            "has {} values, but the source has {} instances on this run's lattice \
                             ({}); give exactly one value per instance, or a single number",
                            v.len(),
                            supports.len(),
                            describe(&source.acts_on)
                        ),
                    ));
                    continue;
                }
            };
            let half = source.half_spread();
            // τ in the run's unit: the value times an exact power of ten, one rounding.
            let correlation_time = source
                .correlation_time
                .map(|(tau, unit)| tau * unit.factor_to(time_unit));
            if let Some(tau) = correlation_time {
                if !(tau.is_finite() && tau > 0.0) {
                    problems.push(Problem::new(
                        format!("{path}/correlation_time/value"),
                        format!(
                            "gives τ = {tau} {time_unit} in the run's time unit; τ must be \
                             finite and > 0 there: check the value and its unit"
                        ),
                    ));
                    continue;
                }
            }
            for (k, ((support, bond), a)) in supports.into_iter().zip(amplitudes).enumerate() {
                let delta = self.frequency_unit.to_angular(a, time_unit) * half;
                if !(delta.is_finite() && delta >= 0.0 && half > 0.0) {
                    let at = match source.amplitude {
                        Amplitude::Scalar(_) => format!("{path}/amplitude"),
                        Amplitude::PerInstance(_) => format!("{path}/amplitude/{k}"),
                    };
                    problems.push(Problem::new(
                        at,
                        format!(
                            "gives δ = {delta} rad/{time_unit} (amplitude {a} {} times half the \
                             spread {half}); δ must be finite and ≥ 0 with a positive spread: \
                             check the amplitude, its unit and `operator_spectrum`",
                            self.frequency_unit
                        ),
                    ));
                    continue;
                }
                instances.push(Instance {
                    source: index,
                    support,
                    bond,
                    delta,
                    family: source.family,
                    mean_offset: source.mean_offset,
                    mean_offset_uncertainty: source.mean_offset_uncertainty,
                    correlation_time,
                });
            }
        }
        let device = self.device.expand(lattice, time_unit);
        let device = match device {
            Ok(d) => d,
            Err(p) => {
                problems.extend(p);
                DeviceModel::default()
            }
        };
        if problems.is_empty() {
            Ok(NoiseModel {
                redrawn: self.redrawn,
                instances,
                device,
            })
        } else {
            Err(problems)
        }
    }
}

/// How the instances of `acts_on` are counted, for messages.
fn describe(acts_on: &ActsOn) -> &'static str {
    match acts_on {
        ActsOn::EachSite => "each_site: one per site",
        ActsOn::EachBond => "each_bond: one per bond",
        ActsOn::Sites(_) => "one per listed support",
    }
}

/// The sorted support (and bond index) of every instance of `source`, or `None` after
/// recording why there are none.
fn supports_of(
    source: &NoiseSource,
    lattice: &Lattice,
    path: &str,
    problems: &mut Vec<Problem>,
) -> Option<Vec<(Vec<usize>, Option<usize>)>> {
    let n = lattice.n_sites();
    match &source.acts_on {
        ActsOn::EachSite if n == 0 => {
            problems.push(Problem::new(
                format!("{path}/acts_on"),
                "is `each_site`, but the run's lattice has no sites; check the run file",
            ));
            None
        }
        ActsOn::EachSite => Some((0..n).map(|s| (vec![s], None)).collect()),
        ActsOn::EachBond if lattice.n_bonds() == 0 => {
            problems.push(Problem::new(
                format!("{path}/acts_on"),
                format!(
                    "is `each_bond`, but the run's lattice ({} with {n} sites) has no bonds; \
                     use `each_site`, or list the supports as {{\"sites\": [[0, 1], ...]}}",
                    lattice.geometry().as_str()
                ),
            ));
            None
        }
        ActsOn::EachBond => Some(
            lattice
                .bonds()
                .iter()
                .enumerate()
                .map(|(b, &[x, y])| {
                    let (x, y) = (x as usize, y as usize);
                    (vec![x.min(y), x.max(y)], Some(b))
                })
                .collect(),
        ),
        ActsOn::Sites(lists) => {
            let before = problems.len();
            let mut out = Vec::with_capacity(lists.len());
            for (j, list) in lists.iter().enumerate() {
                for (k, &s) in list.iter().enumerate() {
                    if s >= n {
                        problems.push(Problem::new(
                            format!("{path}/acts_on/sites/{j}/{k}"),
                            format!(
                                "site {s} does not exist: the run's lattice has {n} sites, \
                                 numbered 0 to {}; sites are 0-based",
                                n.saturating_sub(1)
                            ),
                        ));
                    }
                }
                let mut support = list.clone();
                support.sort_unstable();
                support.dedup();
                if support.len() != list.len() || support.is_empty() {
                    problems.push(Problem::new(
                        format!("{path}/acts_on/sites/{j}"),
                        "must list at least one site, each once",
                    ));
                }
                out.push((support, None));
            }
            (problems.len() == before).then_some(out)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::lattice::{Boundary, Geometry};
    use std::f64::consts::TAU;

    fn chain(n: usize) -> Lattice {
        Lattice::regular(Geometry::Chain, &[n], Boundary::Open).unwrap()
    }

    fn record(acts_on: ActsOn, amplitude: Amplitude, unit: FrequencyUnit) -> NoiseRecord {
        NoiseRecord {
            frequency_unit: unit,
            redrawn: Redrawn::EveryRealization,
            sources: vec![NoiseSource {
                name: "s".into(),
                acts_on,
                operator_spectrum: [-1.0, 1.0],
                amplitude,
                family: Family::Uniform,
                mean_offset: 0.1,
                mean_offset_uncertainty: 0.05,
                correlation_time: None,
            }],
            calibration: None,
            format_version: 1,
            device: DeviceRecord::default(),
        }
    }

    #[test]
    fn each_site_gives_one_instance_per_site_in_order() {
        let r = record(
            ActsOn::EachSite,
            Amplitude::Scalar(0.5),
            FrequencyUnit::RadPerUs,
        );
        let m = r.expand(&chain(3), TimeUnit::Us).unwrap();
        let supports: Vec<_> = m.instances.iter().map(|i| i.support.clone()).collect();
        assert_eq!(supports, [vec![0], vec![1], vec![2]]);
        assert!(m
            .instances
            .iter()
            .all(|i| i.delta == 0.5 && i.bond.is_none()));
        assert!((m.instances[0].systematic() - 0.15).abs() < 1e-15);
    }

    #[test]
    fn each_bond_follows_the_lattice_bond_order_with_sorted_supports() {
        let l = Lattice::regular(Geometry::Chain, &[3], Boundary::Periodic).unwrap();
        let r = record(
            ActsOn::EachBond,
            Amplitude::PerInstance(vec![1.0, 2.0, 3.0]),
            FrequencyUnit::RadPerUs,
        );
        let m = r.expand(&l, TimeUnit::Us).unwrap();
        let got: Vec<_> = m
            .instances
            .iter()
            .map(|i| (i.support.clone(), i.bond, i.delta))
            .collect();
        assert_eq!(
            got,
            [
                (vec![0, 1], Some(0), 1.0),
                (vec![1, 2], Some(1), 2.0),
                (vec![0, 2], Some(2), 3.0)
            ]
        );
    }

    #[test]
    fn delta_is_the_converted_amplitude_times_half_the_spread() {
        let mut r = record(
            ActsOn::Sites(vec![vec![2, 0]]),
            Amplitude::Scalar(1.0),
            FrequencyUnit::MHz,
        );
        r.sources[0].operator_spectrum = [0.0, 1.0];
        let m = r.expand(&chain(3), TimeUnit::Us).unwrap();
        // 1 MHz = 2π rad/us (SI: angular frequency = 2π × frequency); a projector has spread 1.
        assert_eq!(m.instances[0].delta, TAU * 0.5);
        assert_eq!(m.instances[0].support, [0, 2]);
    }

    #[test]
    fn expansion_problems_name_json_pointers() {
        let r = record(ActsOn::EachBond, Amplitude::Scalar(1.0), FrequencyUnit::Hz);
        let p = r.expand(&chain(1), TimeUnit::S).unwrap_err();
        assert_eq!(p[0].path, "/sources/0/acts_on");
        assert!(p[0].message.contains("no bonds"));

        let r = record(
            ActsOn::Sites(vec![vec![0], vec![1, 4]]),
            Amplitude::Scalar(1.0),
            FrequencyUnit::Hz,
        );
        let p = r.expand(&chain(4), TimeUnit::S).unwrap_err();
        assert_eq!(p[0].path, "/sources/0/acts_on/sites/1/1");
        assert!(p[0].message.contains("numbered 0 to 3"), "{}", p[0].message);

        let r = record(
            ActsOn::EachSite,
            Amplitude::PerInstance(vec![1.0; 3]),
            FrequencyUnit::Hz,
        );
        let p = r.expand(&chain(4), TimeUnit::S).unwrap_err();
        assert_eq!(p[0].path, "/sources/0/amplitude");
        assert!(p[0]
            .message
            .contains("has 3 values, but the source has 4 instances"));
    }

    #[test]
    fn an_overflowing_delta_is_an_error_not_infinity() {
        let r = record(
            ActsOn::EachSite,
            Amplitude::Scalar(1e300),
            FrequencyUnit::GHz,
        );
        let p = r.expand(&chain(2), TimeUnit::S).unwrap_err();
        assert_eq!(p.len(), 2);
        assert!(p[0].message.contains("finite"));
    }
}
