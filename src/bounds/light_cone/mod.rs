//! Lieb–Robinson light cones (docs/method.md §5): walk sums over the run's bonds
//! and the exposure time `T_i(t)` of every noise source to an observable's support.
//!
//! With `J̃_e` the norm bound of bond `e` for every noise draw (the target term plus the largest
//! bond perturbation; single-site terms do not enter), the walk sums are
//!
//! `a1_e = J̃_e [e meets X]`, `a(k+1)_e' = J̃_e' Σ_{e meets e'} a(k)_e`, `W_k(i) = Σ_{e meets Y_i} a(k)_e`,
//!
//! `u_i(τ) = Σ_{k≥1} (2τ)^k/k! · W_k(i)` bounds `‖[O_g(τ), V_i]‖ / s_O`, and the exposure is
//! `T_i(t) = ∫_0^t min(1, u_i)`. Every number returned here is an upper bound:
//!
//! * **Region.** `a(k)` lives on bonds within distance `k − 1` of `X`, so `a(1..=K)` is computed
//!   exactly on the bonds within distance `K − 1` (found by a breadth-first search bounded at
//!   `K`); only sources within distance `K` have a nonzero `W_k`, `k ≤ K`.
//! * **Tail.** For `k > K`, `‖a(k)‖_∞ ≤ q^{k−K} ‖a(K)‖_∞` with `q = max_e J̃_e·#{e' meets e}`
//!   over the whole lattice, so `W_k(i) ≤ n_Y(i) q^{k−K} ‖a(K)‖_∞` (`n_Y` the number of bonds
//!   meeting `Y_i`), and the dropped part of `∫_0^t u_i` is at most `n_Y(i)·C(t)` with
//!   `C(t) = ‖a(K)‖_∞ q^{−K−1}/2 · Σ_{m ≥ K+2} (2tq)^m/m!` (a Poisson tail, bounded by its first
//!   term over `1 − x/(m+1)`). `K` is the smallest order with `C(t_max) ≤ 10^{-30} t_max` under
//!   the a-priori growth bound: it is chosen by that rule, not fixed. Sources outside the
//!   region get `T_i ≤ min(t, n_Y(i)·C(t))`.
//! * **Scaling.** `a(k)` is kept as a mantissa vector with maximum in `[1, 2)` times a running
//!   power of two, so nothing overflows however large `q^k` grows. Per source the series is
//!   evaluated in the variable `x = τ/τ_ref` with `τ_ref ≤ t_max` chosen so that every
//!   coefficient is at most `e^600`; where `τ_ref < t_max`, `u_i(τ_ref) ≥ e^300 > 1`, so the
//!   crossing of 1 lies below `τ_ref` and later times need no series at all.
//! * **Reuse.** The numbers of a support depend only on its region (bonds with `J̃`, sources
//!   with `n_Y`, `K`, in the order the computation visits them), on `q` and on the times.
//!   [`ExposureCache`] finds each region by a search costing time proportional to it, and
//!   reuses the values of an earlier support whose region is equal number for number (a
//!   translate on a uniform lattice, with no boundary or other coupling inside the region):
//!   the same operations on the same numbers, so the same bits. On a periodic lattice the
//!   sites at the seam list their neighbours in another order, so regions containing the seam
//!   are computed afresh. Within one region, sources with equal distance, `n_Y` and walk sums
//!   share one series.
//! * **Crossing.** `T_i(t) ≤ ∫_0^{min(t, τ_c)} u_i + (t − τ_c)_+` for *every* `τ_c ≥ 0`
//!   (equality at the crossing `τ*`), so the crossing found by Newton's method on `ln u_i(e^y)`
//!   (convex in `y`, iterates approach `τ*` from above) needs no error analysis.
//!
//! Floating point: all sums have non-negative terms, in a fixed order (deterministic; the
//! parallel loops compute each element independently). Relative rounding is at most about
//! `10·(K+2)` units of `2^{-53}` across the recursion and the Horner evaluations, and the
//! logarithms of the coefficients (with `ln k!` summed term by term) err by at most about
//! `K² ln K` units absolute; every `T_i` and tail is multiplied by
//! `exp(64·2^{-52}·(K+3)² ln(K+3) + 10^{-12})` to cover it, mantissas that would fall below
//! `2^{-1000}` are rounded up to it, and `(K+2)·10^{-300}·t` is added for terms lost to
//! underflow. The result is capped at `t`.
//!
//! The files: this one holds the interaction graph with its `J̃` ([`WalkGraph`]) and why the
//! statement may be unavailable ([`Unavailable`]); `region` the bounded search for a support's
//! region and the per-site index of instances; `walks` the scaled recursion of the walk sums;
//! `tail` the choice of `K` and the tail bound `C(t)`; `exposure` the per-source series and
//! the exposure times `T_i(t)`; `cache` the reuse of equal regions across supports;
//! `comparison` the bound of a region that meets the boundary by the interior region of the
//! same support with every bond at the uniform `J̃` (docs/method.md §5, "Comparison with an
//! interior region").

mod cache;
mod comparison;
mod exposure;
mod region;
mod sites;
mod tail;
mod walks;

use super::family;
use crate::model::lattice::Lattice;
use crate::model::noise::{Family, Instance};

pub use cache::ExposureCache;
pub use comparison::{Comparison, ComparisonPlan};
pub use exposure::{Exposure, Series};
pub(crate) use region::Region;
pub use region::{InstanceIndex, RegionSource};
pub use sites::{site_instances, SiteCone};
pub use walks::Walks;

/// Tail tolerance per bond meeting a source, relative to the largest time.
const TAIL_TOLERANCE: f64 = 1e-30;
/// Largest walk order ever used (the tail bound stays rigorous beyond it, only looser).
const MAX_ORDER: usize = 100_000;
/// Smallest mantissa kept in the scaled recursion (values below are rounded up to it).
const MANTISSA_FLOOR: f64 = 9.332_636_185_032_189e-302; // 2^-1000

/// Why the light-cone statement is not available; the certificate states the reason and uses
/// the global bounds.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum Unavailable {
    #[error(
        "the run declares interaction_range = {0}; the light-cone bounds need nearest-neighbour \
         couplings (interaction_range = 1)"
    )]
    InteractionRange(u32),
    #[error(
        "the term-by-term sensitivities need {values} values (sources × times), more than the \
         limit of {limit}"
    )]
    TermsTooLarge { values: usize, limit: usize },
    #[error("the observable has no support (it acts on the whole system)")]
    GlobalObservable,
    #[error("the observable's support names site {site}, but the lattice has {n_sites} sites")]
    SupportOutOfRange { site: usize, n_sites: usize },
    #[error("the run gives {got} bond norms for {expected} bonds")]
    BondNormCount { got: usize, expected: usize },
    #[error("bond {bond} has the norm bound {value}; it must be finite and ≥ 0")]
    BondNorm { bond: usize, value: f64 },
    #[error(
        "noise instance {instance} (source {record_source}) acts on sites {support:?}, which are not \
         one bond of the lattice: such a term is an interaction outside the bond graph"
    )]
    OffGraphSource {
        instance: usize,
        record_source: usize,
        support: Vec<usize>,
    },
    #[error(
        "noise instance {instance} (source {record_source}) acts on a bond with the unbounded family \
         `{family}`: the bond's norm bound J̃ is infinite for some draws, and the Lieb–Robinson \
         bound needs it finite for every draw"
    )]
    UnboundedBondSource {
        instance: usize,
        record_source: usize,
        family: &'static str,
    },
}

/// The interaction graph with the norm bounds `J̃_e`, shared by every observable of a run.
#[derive(Debug, Clone)]
pub struct WalkGraph<'a> {
    lattice: &'a Lattice,
    jtilde: Vec<f64>,
    growth: f64,
}

/// The bond joining sites `a` and `b`, if any.
fn bond_between(lattice: &Lattice, a: usize, b: usize) -> Option<usize> {
    lattice
        .neighbours(a)
        .iter()
        .find(|&&(t, _)| t as usize == b)
        .map(|&(_, e)| e as usize)
}

/// The bond an instance's perturbation adds to, `None` for a single-site instance.
fn bond_of(lattice: &Lattice, i: &Instance) -> Result<Option<usize>, ()> {
    if let Some(b) = i.bond {
        return Ok(Some(b));
    }
    match i.support.as_slice() {
        [_] => Ok(None),
        [a, b] => bond_between(lattice, *a, *b).map(Some).ok_or(()),
        _ => Err(()),
    }
}

impl<'a> WalkGraph<'a> {
    /// `J̃_e = J_e + Σ_{bond instances on e} δ_i (b_i + m_i)`, from the target bond norms in
    /// radians per time unit (`Hamiltonian::bond_norms_angular`) and the expanded instances.
    pub fn new(
        lattice: &'a Lattice,
        bond_norms: &[f64],
        interaction_range: u32,
        instances: &[Instance],
    ) -> Result<WalkGraph<'a>, Unavailable> {
        if interaction_range != 1 {
            return Err(Unavailable::InteractionRange(interaction_range));
        }
        if bond_norms.len() != lattice.n_bonds() {
            return Err(Unavailable::BondNormCount {
                got: bond_norms.len(),
                expected: lattice.n_bonds(),
            });
        }
        let mut jtilde = Vec::with_capacity(bond_norms.len());
        for (bond, &value) in bond_norms.iter().enumerate() {
            if !(value.is_finite() && value >= 0.0) {
                return Err(Unavailable::BondNorm { bond, value });
            }
            jtilde.push(value);
        }
        for (k, inst) in instances.iter().enumerate() {
            let bond = bond_of(lattice, inst).map_err(|()| Unavailable::OffGraphSource {
                instance: k,
                record_source: inst.source,
                support: inst.support.clone(),
            })?;
            let Some(e) = bond else { continue };
            if inst.delta == 0.0 {
                continue;
            }
            let b = family::constants(&inst.family).b;
            if !b.is_finite() {
                return Err(Unavailable::UnboundedBondSource {
                    instance: k,
                    record_source: inst.source,
                    family: inst.family.name(),
                });
            }
            jtilde[e] += inst.delta * (b + inst.systematic());
        }
        let mut growth = 0.0f64;
        for (e, &[a, b]) in lattice.bonds().iter().enumerate() {
            let meets = lattice.neighbours(a as usize).len() + lattice.neighbours(b as usize).len();
            growth = growth.max(jtilde[e] * (meets - 1) as f64);
        }
        Ok(WalkGraph {
            lattice,
            jtilde,
            growth,
        })
    }

    /// The lattice.
    pub fn lattice(&self) -> &'a Lattice {
        self.lattice
    }

    /// The norm bounds `J̃_e`, in bond order.
    pub fn bond_bounds(&self) -> &[f64] {
        &self.jtilde
    }

    /// `q = max_e J̃_e · #{e' meets e}`: `‖a(k+1)‖_∞ ≤ q ‖a(k)‖_∞`.
    pub fn growth(&self) -> f64 {
        self.growth
    }

    /// The number of bonds meeting a site set (`n_Y` of the tail bound).
    pub fn bonds_meeting(&self, support: &[usize]) -> usize {
        match support {
            [s] => self.lattice.neighbours(*s).len(),
            _ => {
                let mut bonds: Vec<u32> = support
                    .iter()
                    .flat_map(|&s| self.lattice.neighbours(s).iter().map(|&(_, e)| e))
                    .collect();
                bonds.sort_unstable();
                bonds.dedup();
                bonds.len()
            }
        }
    }
}

/// Whether a family is bounded (its sources may sit on bonds).
pub fn is_bounded(f: &Family) -> bool {
    family::constants(f).b.is_finite()
}

#[cfg(test)]
mod tests;
