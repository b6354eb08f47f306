//! The device errors of a noise record of format version 2 (docs/noise-record.md, "Version 2"):
//! incoherent (Markovian) errors, state-preparation errors and readout errors, and their
//! expansion into one number per site in the run's units.
//!
//! What the record says is kept as written ([`DeviceRecord`]); [`DeviceRecord::expand`] turns it
//! into what the bounds need ([`DeviceModel`]): per site `Σ_j γ_j c_j` in radians per the run's
//! time unit (docs/method.md §7.1, with the constants `c_j` of [`Jump::constant`]), per site the
//! preparation error `ε_i` and per site the readout flip probability `p_i`. Every uncertainty is
//! added to its value (an upper bound is what the bounds need); nothing unknown is taken as 0.

use super::lattice::Lattice;
use super::units::TimeUnit;
use crate::Problem;

/// The jump operators a record may name (docs/method.md §7.1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Jump {
    /// `L = Z`: `D(ρ) = γ(ZρZ − ρ)`, coherences decay as `e^{−2γt}`.
    Dephasing,
    /// `L = σ⁻ = |0⟩⟨1|`: population of `|1⟩` decays at rate `γ`.
    Decay,
    /// `L = σ⁺ = |1⟩⟨0|`.
    Excitation,
    /// `D(ρ) = γ(Tr_i(ρ) ⊗ I/2 − ρ) = (γ/4) Σ_a (σ_a ρ σ_a − ρ)`.
    Depolarising,
}

impl Jump {
    /// All jumps with their spelling in files.
    pub const ALL: [(Jump, &'static str); 4] = [
        (Jump::Dephasing, "dephasing"),
        (Jump::Decay, "decay"),
        (Jump::Excitation, "excitation"),
        (Jump::Depolarising, "depolarising"),
    ];

    /// The spelling used in files.
    pub fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(j, _)| *j == self)
            .map(|(_, s)| *s)
            .unwrap_or("?")
    }

    /// Parses the spelling used in files.
    pub fn parse(text: &str) -> Option<Jump> {
        Self::ALL.iter().find(|(_, s)| *s == text).map(|(j, _)| *j)
    }

    /// `c_j` with `‖D_j†(X)‖ ≤ γ_j c_j max_{n} ‖[n·σ, X]‖` for every `X` (docs/method.md
    /// §7.1): 1 for dephasing, decay and excitation, 3/4 for depolarising.
    pub fn constant(self) -> f64 {
        match self {
            Jump::Depolarising => 0.75,
            _ => 1.0,
        }
    }
}

/// A rate unit: per second, millisecond, microsecond or nanosecond (`1/s` ... `1/ns`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RateUnit(pub TimeUnit);

impl RateUnit {
    /// The spellings used in files.
    pub const ALL: [(RateUnit, &'static str); 4] = [
        (RateUnit(TimeUnit::S), "1/s"),
        (RateUnit(TimeUnit::Ms), "1/ms"),
        (RateUnit(TimeUnit::Us), "1/us"),
        (RateUnit(TimeUnit::Ns), "1/ns"),
    ];

    /// Parses the spelling used in files.
    pub fn parse(text: &str) -> Option<RateUnit> {
        Self::ALL.iter().find(|(_, s)| *s == text).map(|(u, _)| *u)
    }

    /// The spelling used in files.
    pub fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(u, _)| *u == self)
            .map(|(_, s)| *s)
            .unwrap_or("?")
    }

    /// The factor turning a rate in this unit into one per `time_unit` (an exact power of ten).
    pub fn factor_to(self, time_unit: TimeUnit) -> f64 {
        time_unit.factor_to(self.0)
    }
}

/// The sites an entry acts on.
#[derive(Debug, Clone, PartialEq)]
pub enum SiteSet {
    /// Every site of the run's lattice.
    EachSite,
    /// The listed sites (0-based, no repeats).
    Sites(Vec<usize>),
}

/// How an incoherent channel is given.
#[derive(Debug, Clone, PartialEq)]
pub enum ChannelSpec {
    /// One jump operator with its rate and the rate's uncertainty, in `unit`.
    Rate {
        jump: Jump,
        rate: f64,
        uncertainty: f64,
        unit: RateUnit,
    },
    /// Relaxation and coherence times with their uncertainties, in `unit` (docs/method.md §7.1,
    /// "From T1 and T2").
    Times {
        t1: f64,
        t1_uncertainty: f64,
        t2: f64,
        t2_uncertainty: f64,
        unit: TimeUnit,
    },
}

/// One incoherent channel of the record.
#[derive(Debug, Clone, PartialEq)]
pub struct Channel {
    pub name: String,
    pub acts_on: SiteSet,
    pub spec: ChannelSpec,
}

/// One preparation entry: every site of `acts_on` is prepared within trace distance
/// `trace_distance + uncertainty` of the intended single-site state.
#[derive(Debug, Clone, PartialEq)]
pub struct Preparation {
    pub acts_on: SiteSet,
    pub trace_distance: f64,
    pub uncertainty: f64,
}

/// Which observables the readout errors apply to: those measured by reading every site of
/// their support in the computational basis (diagonal in it).
#[derive(Debug, Clone, PartialEq)]
pub enum AppliesTo {
    All,
    Names(Vec<String>),
}

impl AppliesTo {
    /// Whether the observable `name` is declared diagonal in the measured basis.
    pub fn covers(&self, name: &str) -> bool {
        match self {
            AppliesTo::All => true,
            AppliesTo::Names(v) => v.iter().any(|n| n == name),
        }
    }
}

/// One readout entry: a site of `acts_on` reads 1 for 0 with probability at most
/// `flip_0_to_1 + uncertainty`, and 0 for 1 with at most `flip_1_to_0 + uncertainty`.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadoutEntry {
    pub acts_on: SiteSet,
    pub flip_0_to_1: f64,
    pub flip_1_to_0: f64,
    pub uncertainty: f64,
}

/// The readout section.
#[derive(Debug, Clone, PartialEq)]
pub struct Readout {
    pub applies_to: AppliesTo,
    pub entries: Vec<ReadoutEntry>,
}

/// The device sections of a record (all absent in a version 1 record).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct DeviceRecord {
    pub incoherent: Option<Vec<Channel>>,
    pub preparation: Option<Vec<Preparation>>,
    pub readout: Option<Readout>,
}

impl DeviceRecord {
    /// Whether the record has no device section.
    pub fn is_empty(&self) -> bool {
        self.incoherent.is_none() && self.preparation.is_none() && self.readout.is_none()
    }
}

/// The device errors expanded against a run: one number per site.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct DeviceModel {
    /// Per site `Σ_j γ_j c_j` in radians per the run's time unit (upper bounds of the rates).
    pub incoherent: Option<Vec<f64>>,
    /// Per site `ε_i` (trace distance plus uncertainty, summed over entries, at most 1).
    pub preparation: Option<Vec<f64>>,
    /// Per site `p_i = max(p(0→1), p(1→0)) + uncertainty`, summed over entries, at most 1.
    pub readout: Option<(Vec<f64>, AppliesTo)>,
}

impl DeviceModel {
    /// Whether the record gave any device section.
    pub fn is_empty(&self) -> bool {
        self.incoherent.is_none() && self.preparation.is_none() && self.readout.is_none()
    }
}

/// Upper bounds of the rates `(γ_relax, γ_z)` implied by `T1 ± u1` and `T2 ± u2`
/// (docs/method.md §7.1): `γ_relax = 1/(T1 − u1)` for the relaxation (decay and excitation
/// together) and `γ_z = max(0, 1/(T2 − u2) − 1/(2(T1 + u1)))/2` for `L = Z`. The reader has
/// checked `0 ≤ u1 < T1`, `0 ≤ u2 < T2`.
pub fn rates_from_times(t1: f64, u1: f64, t2: f64, u2: f64) -> (f64, f64) {
    let relax = 1.0 / (t1 - u1);
    let z = (1.0 / (t2 - u2) - 0.5 / (t1 + u1)).max(0.0) * 0.5;
    (relax, z)
}

impl DeviceRecord {
    /// Expands the sections against a run's lattice and time unit; problems name JSON pointers
    /// into the record (a listed site outside the lattice, a value that is not finite after
    /// the unit conversion).
    pub fn expand(
        &self,
        lattice: &Lattice,
        time_unit: TimeUnit,
    ) -> Result<DeviceModel, Vec<Problem>> {
        let n = lattice.n_sites();
        let mut problems = Vec::new();
        let mut model = DeviceModel::default();
        if let Some(channels) = &self.incoherent {
            let mut per_site = vec![0.0f64; n];
            for (c, ch) in channels.iter().enumerate() {
                let path = format!("/incoherent/{c}");
                let Some(sites) = sites_of(&ch.acts_on, n, &path, &mut problems) else {
                    continue;
                };
                let value = match &ch.spec {
                    ChannelSpec::Rate {
                        jump,
                        rate,
                        uncertainty,
                        unit,
                    } => (rate + uncertainty) * unit.factor_to(time_unit) * jump.constant(),
                    ChannelSpec::Times {
                        t1,
                        t1_uncertainty,
                        t2,
                        t2_uncertainty,
                        unit,
                    } => {
                        let (relax, z) =
                            rates_from_times(*t1, *t1_uncertainty, *t2, *t2_uncertainty);
                        // Rates per `unit`, turned into rates per the run's time unit.
                        (relax + z) * time_unit.factor_to(*unit)
                    }
                };
                if !value.is_finite() {
                    problems.push(Problem::new(
                        path,
                        format!(
                            "gives the rate {value} per {time_unit} after the unit conversion; \
                             check the numbers and their unit"
                        ),
                    ));
                    continue;
                }
                // Per site, channels added in record order (deterministic).
                for s in sites {
                    per_site[s] += value;
                }
            }
            model.incoherent = Some(per_site);
        }
        if let Some(entries) = &self.preparation {
            let mut per_site = vec![0.0f64; n];
            for (e, p) in entries.iter().enumerate() {
                let path = format!("/preparation/{e}");
                if let Some(sites) = sites_of(&p.acts_on, n, &path, &mut problems) {
                    for s in sites {
                        per_site[s] = (per_site[s] + p.trace_distance + p.uncertainty).min(1.0);
                    }
                }
            }
            model.preparation = Some(per_site);
        }
        if let Some(r) = &self.readout {
            let mut per_site = vec![0.0f64; n];
            for (e, p) in r.entries.iter().enumerate() {
                let path = format!("/readout/errors/{e}");
                if let Some(sites) = sites_of(&p.acts_on, n, &path, &mut problems) {
                    let flip = p.flip_0_to_1.max(p.flip_1_to_0) + p.uncertainty;
                    for s in sites {
                        per_site[s] = (per_site[s] + flip).min(1.0);
                    }
                }
            }
            model.readout = Some((per_site, r.applies_to.clone()));
        }
        if problems.is_empty() {
            Ok(model)
        } else {
            Err(problems)
        }
    }
}

impl DeviceRecord {
    /// A problem for every name in `readout.applies_to` that names no observable of the run
    /// (a misspelt name would otherwise leave that observable's readout errors out).
    pub fn unknown_readout_names(&self, observables: &[String]) -> Vec<Problem> {
        let Some(Readout {
            applies_to: AppliesTo::Names(names),
            ..
        }) = &self.readout
        else {
            return Vec::new();
        };
        names
            .iter()
            .enumerate()
            .filter(|(_, n)| !observables.contains(n))
            .map(|(k, n)| {
                Problem::new(
                    format!("/readout/applies_to/{k}"),
                    format!(
                        "names `{n}`, but the run has no observable of that name; the run's \
                         observables are {}",
                        observables
                            .iter()
                            .map(|o| format!("`{o}`"))
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                )
            })
            .collect()
    }
}

/// The sites of `set` on a lattice of `n` sites, or `None` after recording why not.
fn sites_of(
    set: &SiteSet,
    n: usize,
    path: &str,
    problems: &mut Vec<Problem>,
) -> Option<Vec<usize>> {
    match set {
        SiteSet::EachSite => Some((0..n).collect()),
        SiteSet::Sites(v) => {
            let before = problems.len();
            for (k, &s) in v.iter().enumerate() {
                if s >= n {
                    problems.push(Problem::new(
                        format!("{path}/acts_on/sites/{k}"),
                        format!(
                            "site {s} does not exist: the run's lattice has {n} sites, numbered \
                             0 to {}; sites are 0-based",
                            n.saturating_sub(1)
                        ),
                    ));
                }
            }
            (problems.len() == before).then(|| v.clone())
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::lattice::{Boundary, Geometry};

    fn chain(n: usize) -> Lattice {
        Lattice::regular(Geometry::Chain, &[n], Boundary::Open).unwrap()
    }

    /// T1 = T2/2 is pure relaxation (γ_z = 0); T2 = T1 gives γ_z = 1/(4 T1): from
    /// 1/T2 = γ_relax/2 + 2γ_z (the textbook relation between the decay of coherences and
    /// populations, e.g. Nielsen & Chuang §8.3, recalled from memory, and rederived in
    /// docs/method.md §7.1).
    #[test]
    fn times_give_the_textbook_rates() {
        let (relax, z) = rates_from_times(10.0, 0.0, 20.0, 0.0);
        assert_eq!(relax, 0.1);
        assert_eq!(z, 0.0);
        let (relax, z) = rates_from_times(10.0, 0.0, 10.0, 0.0);
        assert_eq!(relax, 0.1);
        assert!((z - 0.025).abs() < 1e-17);
        // Uncertainties only make the rates larger.
        let (r2, z2) = rates_from_times(10.0, 1.0, 10.0, 1.0);
        assert!(r2 > relax && z2 > z);
    }

    /// Units: 10 per ms is 0.01 per us, exactly the decimal; T1 in us on a run in ns.
    #[test]
    fn rates_and_times_are_converted_to_the_run_unit() {
        let rec = DeviceRecord {
            incoherent: Some(vec![
                Channel {
                    name: "a".into(),
                    acts_on: SiteSet::Sites(vec![0]),
                    spec: ChannelSpec::Rate {
                        jump: Jump::Depolarising,
                        rate: 8.0,
                        uncertainty: 2.0,
                        unit: RateUnit(TimeUnit::Ms),
                    },
                },
                Channel {
                    name: "b".into(),
                    acts_on: SiteSet::EachSite,
                    spec: ChannelSpec::Times {
                        t1: 40.0,
                        t1_uncertainty: 0.0,
                        t2: 80.0,
                        t2_uncertainty: 0.0,
                        unit: TimeUnit::Us,
                    },
                },
            ]),
            preparation: Some(vec![Preparation {
                acts_on: SiteSet::EachSite,
                trace_distance: 0.75,
                uncertainty: 0.5,
            }]),
            readout: None,
        };
        let m = rec.expand(&chain(2), TimeUnit::Us).unwrap();
        let inc = m.incoherent.unwrap();
        assert!((inc[0] - (0.01 * 0.75 + 0.025)).abs() < 1e-17);
        assert_eq!(inc[1], 0.025);
        assert_eq!(m.preparation.unwrap(), vec![1.0, 1.0]);
        let ns = rec.expand(&chain(2), TimeUnit::Ns).unwrap();
        assert!((ns.incoherent.unwrap()[1] - 2.5e-5).abs() < 1e-20);
    }

    #[test]
    fn a_site_outside_the_lattice_is_named() {
        let rec = DeviceRecord {
            readout: Some(Readout {
                applies_to: AppliesTo::All,
                entries: vec![ReadoutEntry {
                    acts_on: SiteSet::Sites(vec![1, 7]),
                    flip_0_to_1: 0.01,
                    flip_1_to_0: 0.02,
                    uncertainty: 0.0,
                }],
            }),
            ..Default::default()
        };
        let err = rec.expand(&chain(3), TimeUnit::Us).unwrap_err();
        assert_eq!(err.len(), 1);
        assert_eq!(err[0].path, "/readout/errors/0/acts_on/sites/1");
        let ok = rec.expand(&chain(8), TimeUnit::Us).unwrap();
        let (p, _) = ok.readout.unwrap();
        assert_eq!(p[7], 0.02);
        assert_eq!(p[0], 0.0);
    }
}
