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

use std::collections::HashMap;
use std::sync::Arc;

use rayon::prelude::*;

use super::family;
use crate::model::lattice::Lattice;
use crate::model::noise::{Family, Instance};

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

/// `ln Σ_{m ≥ big_m} x^m/m!` (an upper bound), with `ln_fact[m] = ln m!`.
fn ln_poisson_tail(x: f64, big_m: usize, ln_fact: f64) -> f64 {
    if x <= 0.0 {
        return f64::NEG_INFINITY;
    }
    let m = big_m as f64;
    if x < m + 1.0 {
        // Terms after the first shrink by at least x/(m+1) each.
        m * x.ln() - ln_fact - (-(x / (m + 1.0))).ln_1p()
    } else {
        x // Σ_all x^m/m! = e^x.
    }
}

/// The smallest order `K` whose a-priori tail bound at `t_max` meets the tolerance.
fn choose_order(a1_max: f64, q: f64, t_max: f64) -> usize {
    if a1_max == 0.0 || q == 0.0 || t_max == 0.0 {
        return 1;
    }
    let x = 2.0 * t_max * q;
    // C ≤ a1 q^{-2}/2 · P(x, K+2) (since ‖a(K)‖ ≤ a1 q^{K-1}).
    let target =
        (TAIL_TOLERANCE * t_max).ln() - a1_max.ln() + 2.0 * q.ln() + std::f64::consts::LN_2;
    let mut ln_fact = 0.0;
    for m in 1..=MAX_ORDER + 2 {
        ln_fact += (m as f64).ln();
        if m >= 3 && ln_poisson_tail(x, m, ln_fact) <= target {
            return m - 2;
        }
    }
    MAX_ORDER
}

/// The walk sums of one observable support: the region, the scaled `W_k(i)` of every source in
/// it, and what the tail bound needs.
#[derive(Debug, Clone)]
pub struct Walks {
    /// The order `K`: `W_1..W_K` are exact, the rest is covered by the tail bound.
    order: usize,
    /// `q` of the graph.
    growth: f64,
    /// `ln ‖a(K)‖_∞` (−∞ if `a ≡ 0`).
    ln_a_max: f64,
    /// `ln k!` for `k = 0..=K+2`.
    ln_fact: Vec<f64>,
    /// The logarithm of the relative rounding margin (module header).
    ln_margin: f64,
    /// The power of two of `a(k)`, `k = 1..=K` (index `k − 1`).
    exponents: Vec<i32>,
    /// Sources within distance `K`, sorted by (distance, instance).
    region: Vec<RegionSource>,
    /// For region source `j` with distance `r ≥ 1`, the mantissas of `W_r..W_K` at
    /// `w[offsets[j]..offsets[j + 1]]` (empty for `r = 0`).
    offsets: Vec<usize>,
    w: Vec<f64>,
}

/// One source inside the computed region.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RegionSource {
    /// Index of the instance.
    pub instance: usize,
    /// Graph distance from the observable's support to the source's support (0: they meet).
    pub distance: u32,
    /// Number of bonds meeting the source's support.
    pub bonds_meeting: u32,
}

/// Which instances act on each site (compressed rows), so that the sources of a support's
/// region are found in time proportional to the region, not to the number of instances.
#[derive(Debug, Clone)]
pub struct InstanceIndex<'a> {
    instances: &'a [Instance],
    /// The instances acting on site `s` are `items[offsets[s]..offsets[s + 1]]` (increasing).
    offsets: Vec<usize>,
    items: Vec<usize>,
}

impl<'a> InstanceIndex<'a> {
    /// Indexes `instances` by the sites of their supports (sites `≥ n_sites` are ignored).
    pub fn new(instances: &'a [Instance], n_sites: usize) -> InstanceIndex<'a> {
        let mut offsets = vec![0usize; n_sites + 1];
        for inst in instances {
            for &s in &inst.support {
                if s < n_sites {
                    offsets[s + 1] += 1;
                }
            }
        }
        for s in 0..n_sites {
            offsets[s + 1] += offsets[s];
        }
        let mut fill = offsets.clone();
        let mut items = vec![0usize; offsets[n_sites]];
        for (k, inst) in instances.iter().enumerate() {
            for &s in &inst.support {
                if s < n_sites {
                    items[fill[s]] = k;
                    fill[s] += 1;
                }
            }
        }
        InstanceIndex {
            instances,
            offsets,
            items,
        }
    }

    /// The indexed instances.
    pub fn instances(&self) -> &'a [Instance] {
        self.instances
    }

    fn at(&self, s: usize) -> &[usize] {
        match (self.offsets.get(s), self.offsets.get(s + 1)) {
            (Some(&a), Some(&b)) => &self.items[a..b],
            _ => &[],
        }
    }
}

/// Per-thread work arrays of the region search (distance per site, local index per bond), kept
/// at `u32::MAX` between uses so that a search costs time proportional to its region.
#[derive(Default)]
struct Scratch {
    dist: Vec<u32>,
    local: Vec<u32>,
}

thread_local! {
    static SCRATCH: std::cell::RefCell<Scratch> = std::cell::RefCell::new(Scratch::default());
}

/// Everything the walk sums and the exposures of one support depend on, besides the graph's
/// growth `q` and the times: the region's bonds (distance from `X`, `J̃`, which region bonds
/// meet each), its sources (distance, `n_Y`, the region bonds meeting each) and the order `K`,
/// all in the order the computation visits them (breadth-first discovery order, which follows
/// the lattice's neighbour lists). Two supports with equal [`Region::same_shape`] get the same
/// floating-point operations on the same values, so their exposures are equal to the bit,
/// wherever they sit on the lattice; only the instance indices of the sources differ.
#[derive(Debug, Clone)]
pub(crate) struct Region {
    order: usize,
    bond_dist: Vec<u32>,
    jt: Vec<f64>,
    meet_off: Vec<u32>,
    meet: Vec<u32>,
    sources: Vec<RegionSource>,
    src_off: Vec<u32>,
    src_bonds: Vec<u32>,
}

impl Region {
    /// The bonds within distance `K − 1` and the sources within distance `K` of `x`, with `K`
    /// the order needed for times up to `t_max` ([`choose_order`]).
    fn build(
        graph: &WalkGraph,
        index: &InstanceIndex,
        x: &[usize],
        t_max: f64,
    ) -> Result<Region, Unavailable> {
        let lattice = graph.lattice;
        let n = lattice.n_sites();
        if x.is_empty() {
            return Err(Unavailable::GlobalObservable);
        }
        if let Some(&site) = x.iter().find(|&&s| s >= n) {
            return Err(Unavailable::SupportOutOfRange { site, n_sites: n });
        }
        let mut a1_max = 0.0f64;
        for &s in x {
            for &(_, e) in lattice.neighbours(s) {
                a1_max = a1_max.max(graph.jtilde[e as usize]);
            }
        }
        let order = choose_order(a1_max, graph.growth, t_max);
        let k_max = order as u32;
        SCRATCH.with(|cell| {
            let mut scratch = cell.borrow_mut();
            let Scratch { dist, local } = &mut *scratch;
            if dist.len() < n {
                dist.resize(n, u32::MAX);
            }
            if local.len() < lattice.n_bonds() {
                local.resize(lattice.n_bonds(), u32::MAX);
            }
            let region = Region::search(graph, index, x, k_max, dist, local);
            Ok(region)
        })
    }

    /// The search proper; leaves `dist` and `local` as it found them (all `u32::MAX`).
    fn search(
        graph: &WalkGraph,
        index: &InstanceIndex,
        x: &[usize],
        k_max: u32,
        dist: &mut [u32],
        local: &mut [u32],
    ) -> Region {
        let lattice = graph.lattice;
        let n = lattice.n_sites();
        // Bounded breadth-first search from X, recording the visiting order.
        let mut visited: Vec<u32> = Vec::new();
        for &s in x {
            if dist[s] != 0 {
                dist[s] = 0;
                visited.push(s as u32);
            }
        }
        let mut head = 0;
        while head < visited.len() {
            let s = visited[head] as usize;
            head += 1;
            let d = dist[s];
            if d >= k_max {
                continue;
            }
            for &(t, _) in lattice.neighbours(s) {
                if dist[t as usize] == u32::MAX {
                    dist[t as usize] = d + 1;
                    visited.push(t);
                }
            }
        }

        // Region bonds: distance ≤ K − 1, in order of distance (discovery order).
        const NONE: u32 = u32::MAX;
        let mut bonds: Vec<u32> = Vec::new();
        let mut bond_dist: Vec<u32> = Vec::new();
        for &s in &visited {
            let d = dist[s as usize];
            if d + 1 > k_max {
                break;
            }
            for &(_, e) in lattice.neighbours(s as usize) {
                if local[e as usize] == NONE {
                    local[e as usize] = bonds.len() as u32;
                    bonds.push(e);
                    bond_dist.push(d);
                }
            }
        }
        // For each region bond, the region bonds meeting it (itself once).
        let mut meet_off = Vec::with_capacity(bonds.len() + 1);
        let mut meet: Vec<u32> = Vec::new();
        meet_off.push(0u32);
        for &e in &bonds {
            let [a, b] = lattice.bonds()[e as usize];
            for &(_, f) in lattice.neighbours(a as usize) {
                if local[f as usize] != NONE {
                    meet.push(local[f as usize]);
                }
            }
            for &(_, f) in lattice.neighbours(b as usize) {
                if f != e && local[f as usize] != NONE {
                    meet.push(local[f as usize]);
                }
            }
            meet_off.push(meet.len() as u32);
        }
        let jt: Vec<f64> = bonds.iter().map(|&e| graph.jtilde[e as usize]).collect();

        // Region sources: the instances acting on a visited site (distance ≤ K).
        let mut candidates: Vec<usize> = visited
            .iter()
            .flat_map(|&s| index.at(s as usize).iter().copied())
            .collect();
        candidates.sort_unstable();
        candidates.dedup();
        let instances = index.instances;
        let mut sources: Vec<RegionSource> = candidates
            .into_iter()
            .map(|k| {
                let inst = &instances[k];
                let r = inst
                    .support
                    .iter()
                    .filter(|&&s| s < n)
                    .map(|&s| dist[s])
                    .min()
                    .unwrap_or(u32::MAX);
                RegionSource {
                    instance: k,
                    distance: r,
                    bonds_meeting: graph.bonds_meeting(&inst.support) as u32,
                }
            })
            .collect();
        sources.sort_by_key(|s| (s.distance, s.instance));
        // The region bonds meeting each source (none needed for a source meeting X).
        let mut src_off = vec![0u32];
        let mut src_bonds: Vec<u32> = Vec::new();
        for s in &sources {
            if s.distance > 0 {
                let mut list: Vec<u32> = instances[s.instance]
                    .support
                    .iter()
                    .flat_map(|&site| lattice.neighbours(site).iter().map(|&(_, e)| e))
                    .filter(|&e| local[e as usize] != NONE)
                    .map(|e| local[e as usize])
                    .collect();
                list.sort_unstable();
                list.dedup();
                src_bonds.extend(list);
            }
            src_off.push(src_bonds.len() as u32);
        }
        // Restore the work arrays.
        for &s in &visited {
            dist[s as usize] = u32::MAX;
        }
        for &e in &bonds {
            local[e as usize] = NONE;
        }
        Region {
            order: k_max as usize,
            bond_dist,
            jt,
            meet_off,
            meet,
            sources,
            src_off,
            src_bonds,
        }
    }

    /// Whether `other` has the same shape: every number the walk sums and exposures read is
    /// equal (`J̃` to the bit), position by position; the instance indices may differ.
    fn same_shape(&self, other: &Region) -> bool {
        self.order == other.order
            && self.bond_dist == other.bond_dist
            && self.jt.len() == other.jt.len()
            && self
                .jt
                .iter()
                .zip(&other.jt)
                .all(|(a, b)| a.to_bits() == b.to_bits())
            && self.meet_off == other.meet_off
            && self.meet == other.meet
            && self.src_off == other.src_off
            && self.src_bonds == other.src_bonds
            && self.sources.len() == other.sources.len()
            && self
                .sources
                .iter()
                .zip(&other.sources)
                .all(|(a, b)| a.distance == b.distance && a.bonds_meeting == b.bonds_meeting)
    }

    /// A hash of the shape (the numbers [`Region::same_shape`] compares), to find candidates.
    fn shape_hash(&self) -> u64 {
        use std::hash::{Hash, Hasher};
        let mut h = std::collections::hash_map::DefaultHasher::new();
        self.order.hash(&mut h);
        self.bond_dist.hash(&mut h);
        for v in &self.jt {
            v.to_bits().hash(&mut h);
        }
        self.meet_off.hash(&mut h);
        self.meet.hash(&mut h);
        self.src_off.hash(&mut h);
        self.src_bonds.hash(&mut h);
        for s in &self.sources {
            (s.distance, s.bonds_meeting).hash(&mut h);
        }
        h.finish()
    }

    /// The number of stored numbers (for memory budgets).
    fn size(&self) -> usize {
        self.bond_dist.len() * 3
            + self.meet.len()
            + self.sources.len() * 3
            + self.src_bonds.len()
            + self.meet_off.len()
            + self.src_off.len()
    }
}

impl Walks {
    /// Computes the walk sums from support `x` for every instance whose support lies within the
    /// order needed for times up to `t_max`.
    pub fn new(
        graph: &WalkGraph,
        x: &[usize],
        instances: &[Instance],
        t_max: f64,
    ) -> Result<Walks, Unavailable> {
        let index = InstanceIndex::new(instances, graph.lattice.n_sites());
        let region = Region::build(graph, &index, x, t_max)?;
        Ok(Walks::from_region(graph.growth, &region))
    }

    /// The walk sums of a region (the scaled recursion). Reads only the region and `q`.
    fn from_region(q: f64, reg: &Region) -> Walks {
        let order = reg.order;
        let k_max = order as u32;
        let region = &reg.sources;
        let mut offsets = vec![0usize];
        for s in region {
            let last = offsets[offsets.len() - 1];
            if s.distance > 0 {
                offsets.push(last + (k_max - s.distance + 1) as usize);
            } else {
                offsets.push(last);
            }
        }
        let mut w = vec![0.0f64; offsets[offsets.len() - 1]];
        let (bond_dist, meet_off, meet) = (&reg.bond_dist, &reg.meet_off, &reg.meet);
        let (src_off, src_bonds) = (&reg.src_off, &reg.src_bonds);

        // The scaled recursion.
        let mut a: Vec<f64> = reg
            .jt
            .iter()
            .zip(bond_dist)
            .map(|(&j, &d)| if d == 0 { j } else { 0.0 })
            .collect();
        let mut next = vec![0.0f64; a.len()];
        let mut exponent = normalise(&mut a, 0);
        let mut exponents = Vec::with_capacity(order);
        // Number of region bonds with distance ≤ d is bonds_upto(d).
        let bonds_upto = |d: u32| bond_dist.partition_point(|&x| x <= d);
        let first_far = |k: u32| region.partition_point(|s| s.distance <= k);
        let lo = region.partition_point(|s| s.distance == 0);
        for k in 1..=k_max {
            exponents.push(exponent);
            // W_k for sources with 1 ≤ r ≤ k.
            for j in lo..first_far(k) {
                let mut sum = 0.0;
                for &e in &src_bonds[src_off[j] as usize..src_off[j + 1] as usize] {
                    sum += a[e as usize];
                }
                w[offsets[j] + (k - region[j].distance) as usize] = sum;
            }
            if k == k_max {
                break;
            }
            // a(k+1) is nonzero only on bonds within distance k.
            let live = bonds_upto(k);
            let jt = &reg.jt;
            next[..live]
                .par_iter_mut()
                .enumerate()
                .with_min_len(1024)
                .for_each(|(f, out)| {
                    let mut sum = 0.0;
                    for &e in &meet[meet_off[f] as usize..meet_off[f + 1] as usize] {
                        sum += a[e as usize];
                    }
                    *out = jt[f] * sum;
                });
            std::mem::swap(&mut a, &mut next);
            exponent = normalise(&mut a[..live], exponent);
        }
        let a_max = a.iter().fold(0.0f64, |m, &v| m.max(v));
        let ln_a_max = if a_max > 0.0 {
            a_max.ln() + exponent as f64 * std::f64::consts::LN_2
        } else {
            f64::NEG_INFINITY
        };
        let mut ln_fact = vec![0.0f64; order + 3];
        for m in 1..ln_fact.len() {
            ln_fact[m] = ln_fact[m - 1] + (m as f64).ln();
        }
        // Rounding: ln k! is a sum of k logarithms (absolute error ≤ k·ln k!·ε ≤ k² ln k·ε), and
        // each coefficient's logarithm adds a few terms of that size; the recursion and Horner
        // add ≤ 10(K+2)ε relative. The margin covers all of it with room to spare.
        let kf = order as f64 + 3.0;
        let ln_margin = 64.0 * f64::EPSILON * kf * kf * kf.ln() + 1e-12;
        Walks {
            order,
            growth: q,
            ln_a_max,
            ln_fact,
            ln_margin,
            exponents,
            region: region.clone(),
            offsets,
            w,
        }
    }

    /// The order `K`.
    pub fn order(&self) -> usize {
        self.order
    }

    /// The sources of the region, sorted by (distance, instance).
    pub fn region(&self) -> &[RegionSource] {
        &self.region
    }

    /// `W_k(i)` for region source `j` (unscaled; may overflow to ∞ for huge `k`: for tests).
    pub fn walk_sum(&self, j: usize, k: usize) -> f64 {
        let r = self.region[j].distance as usize;
        if k == 0 || k > self.order || r == 0 || k < r {
            return if r == 0 && k > 0 { f64::INFINITY } else { 0.0 };
        }
        let m = self.w[self.offsets[j] + k - r];
        m * 2f64.powi(self.exponents[k - 1])
    }

    /// `C(t)`: a source meeting `n_Y` bonds has its dropped part of `∫_0^t u` (orders above `K`)
    /// at most `n_Y·C(t)`; a source outside the region has `T_i(t) ≤ min(t, n_Y·C(t))`.
    pub fn tail_per_bond(&self, t: f64) -> f64 {
        let q = self.growth;
        if t <= 0.0 || q == 0.0 || self.ln_a_max == f64::NEG_INFINITY {
            return 0.0;
        }
        let k = self.order;
        let ln = self.ln_a_max - (k as f64 + 1.0) * q.ln() - std::f64::consts::LN_2
            + ln_poisson_tail(2.0 * t * q, k + 2, self.ln_fact[k + 2])
            + self.ln_margin;
        ln.exp()
    }

    /// The dropped part of `u_i(τ)` per bond meeting the source: `‖a(K)‖ q^{−K} P(2τq, K+1)`.
    pub fn u_tail_per_bond(&self, tau: f64) -> f64 {
        let q = self.growth;
        if tau <= 0.0 || q == 0.0 || self.ln_a_max == f64::NEG_INFINITY {
            return 0.0;
        }
        let k = self.order;
        let ln = self.ln_a_max - k as f64 * q.ln()
            + ln_poisson_tail(2.0 * tau * q, k + 1, self.ln_fact[k + 1])
            + self.ln_margin;
        ln.exp()
    }

    /// The series of region source `j`, scaled for times up to `t_max`.
    pub fn series(&self, j: usize, t_max: f64) -> Series {
        let r = self.region[j].distance as usize;
        let k_max = self.order;
        let margin = self.ln_margin.exp();
        let slack = (k_max as f64 + 2.0) * 1e-300;
        if r == 0 {
            return Series {
                r,
                tau_ref: t_max,
                gamma: Vec::new(),
                gamma_d: Vec::new(),
                gamma_integral: Vec::new(),
                crossing: Some(0.0),
                integral_at_crossing: 0.0,
                margin,
                slack,
            };
        }
        let mantissas = &self.w[self.offsets[j]..self.offsets[j + 1]];
        let ln2t = (2.0 * t_max).ln();
        let mut ell: Vec<f64> = mantissas
            .iter()
            .enumerate()
            .map(|(m, &v)| {
                let k = r + m;
                if v > 0.0 && t_max > 0.0 {
                    v.ln() + self.exponents[k - 1] as f64 * std::f64::consts::LN_2 + k as f64 * ln2t
                        - self.ln_fact[k]
                } else {
                    f64::NEG_INFINITY
                }
            })
            .collect();
        // Scale so that every coefficient is at most e^600 (see the module header).
        let mut s = 0.0f64;
        loop {
            let (g, karg) = ell
                .iter()
                .enumerate()
                .map(|(m, &l)| (l + (r + m) as f64 * s, r + m))
                .fold(
                    (f64::NEG_INFINITY, r),
                    |acc, v| if v.0 > acc.0 { v } else { acc },
                );
            if g <= 600.0 {
                break;
            }
            s -= (g - 300.0) / karg as f64;
        }
        for (m, l) in ell.iter_mut().enumerate() {
            *l = (*l + (r + m) as f64 * s).exp();
        }
        let gamma = ell;
        let tau_ref = t_max * s.exp();
        let gamma_integral = gamma
            .iter()
            .enumerate()
            .map(|(m, &g)| g / (r + m + 1) as f64)
            .collect();
        // The derivative's coefficients, formed once (the products poly would form each time).
        let gamma_d = gamma
            .iter()
            .enumerate()
            .map(|(m, &g)| (r + m) as f64 * g)
            .collect();
        let mut series = Series {
            r,
            tau_ref,
            gamma,
            gamma_d,
            gamma_integral,
            crossing: None,
            integral_at_crossing: 0.0,
            margin,
            slack,
        };
        if t_max > 0.0 && series.poly(1.0).0 >= 1.0 {
            // Newton on h(y) = ln u(τ_ref e^y), convex and increasing: from y = 0 (h ≥ 0) the
            // iterates decrease monotonically to the root.
            let mut y = 0.0f64;
            for _ in 0..200 {
                let x = y.exp();
                let (s0, s1) = series.poly(x);
                let h = s0.ln();
                if h <= 1e-12 || s1 <= 0.0 {
                    break;
                }
                y -= h * s0 / s1;
            }
            let tc = tau_ref * y.exp();
            series.crossing = Some(tc);
            series.integral_at_crossing = series.integral_truncated(tc);
        }
        series
    }
}

/// `p · x^r` for `p ≥ 0`, `0 ≤ x ≤ 1`, through logarithms, so that it underflows only when the
/// product itself is below the smallest normal number (a huge `p` and a tiny `x^r` must not
/// give 0).
fn times_power(p: f64, x: f64, r: usize) -> f64 {
    if p <= 0.0 || x <= 0.0 {
        return 0.0;
    }
    (p.ln() + r as f64 * x.ln()).exp()
}

/// Scales `a` so that its maximum is in `[1, 2)`, rounds tiny mantissas up to the floor, and
/// returns the new running exponent (`a_true = a · 2^exponent`).
fn normalise(a: &mut [f64], exponent: i32) -> i32 {
    let m = a.iter().fold(0.0f64, |m, &v| m.max(v));
    if m == 0.0 || !m.is_finite() {
        return exponent;
    }
    let e = m.log2().floor() as i32;
    let factor = 2f64.powi(-e);
    for v in a.iter_mut() {
        if *v > 0.0 {
            *v = (*v * factor).max(MANTISSA_FLOOR);
        }
    }
    exponent + e
}

/// The Lieb–Robinson series of one source, ready to evaluate at any `τ ≤ t_max`.
#[derive(Debug, Clone)]
pub struct Series {
    /// The source's distance `r` (first nonzero order).
    r: usize,
    tau_ref: f64,
    /// `γ_m = W_{r+m} (2τ_ref)^{r+m}/(r+m)!`, each at most `e^600`.
    gamma: Vec<f64>,
    /// `γ_m / (r + m + 1)`, the coefficients of the integral (divided once, not per time:
    /// the same numbers, so the same bits).
    gamma_integral: Vec<f64>,
    /// `(r+m)·γ_m`.
    gamma_d: Vec<f64>,
    /// A time `τ_c` with `u(τ_c) ≥ 1` (`Some(0)` for a source meeting X); `None`: `u < 1` on
    /// `[0, t_max]`.
    crossing: Option<f64>,
    /// `∫_0^{τ_c} u` truncated, computed once (0 without a crossing).
    integral_at_crossing: f64,
    margin: f64,
    slack: f64,
}

impl Series {
    /// `(Σ γ_m x^{r+m}, Σ (r+m) γ_m x^{r+m})` by Horner.
    fn poly(&self, x: f64) -> (f64, f64) {
        let mut p0 = 0.0;
        let mut p1 = 0.0;
        for (&g, &gd) in self.gamma.iter().zip(&self.gamma_d).rev() {
            p0 = p0 * x + g;
            p1 = p1 * x + gd;
        }
        (times_power(p0, x, self.r), times_power(p1, x, self.r))
    }

    /// `∫_0^τ u` truncated at order K (τ ≤ τ_ref), rounded up.
    fn integral_truncated(&self, tau: f64) -> f64 {
        if tau <= 0.0 || self.gamma.is_empty() {
            return 0.0;
        }
        let x = tau / self.tau_ref;
        let mut p = 0.0;
        for &g in self.gamma_integral.iter().rev() {
            p = p * x + g;
        }
        tau * times_power(p, x, self.r) * self.margin + self.slack * tau
    }

    /// `u(τ)` truncated at order K, rounded up; `+∞` beyond the scaling time when `u` has
    /// crossed 1 there (then `min(1, u) = 1`).
    pub fn u_truncated(&self, tau: f64) -> f64 {
        if self.r == 0 {
            return f64::INFINITY;
        }
        if tau > self.tau_ref {
            return f64::INFINITY;
        }
        if tau <= 0.0 {
            return 0.0;
        }
        self.poly(tau / self.tau_ref).0 * self.margin + self.slack
    }

    /// `T(t)` without the tail of orders above K (add `n_Y·C(t)` and cap at `t`).
    pub fn exposure_truncated(&self, t: f64) -> f64 {
        if self.r == 0 {
            return t;
        }
        match self.crossing {
            Some(tc) if t > tc => self.integral_at_crossing + (t - tc),
            _ => self.integral_truncated(t),
        }
    }
}

/// The numbers of one region shape: `T` per source position and time, `C(t)` per time, `K`.
#[derive(Debug)]
struct Values {
    /// `T` of the region sources, time-major: `values[k·R + j]`.
    values: Vec<f64>,
    /// `C(t)` per time.
    tail: Vec<f64>,
    order: usize,
}

impl Values {
    /// `T_j(t)` for every source position `j` of the walks' region and every time (parallel
    /// over sources; each value is computed on its own, so the thread count does not matter).
    fn compute(walks: &Walks, times: &[f64]) -> Values {
        let t_max = max_time(times);
        let tail: Vec<f64> = times.iter().map(|&t| walks.tail_per_bond(t)).collect();
        let n_t = times.len();
        let n_r = walks.region.len();
        // Sources with the same distance, `n_Y` and walk sums (bit for bit: several instances on
        // one support, or mirror images that came out equal) have the same `T`: computed once.
        let mut first: HashMap<(u32, u32, Vec<u64>), usize> = HashMap::new();
        let mut rep = Vec::with_capacity(n_r);
        let mut reps = Vec::new();
        for j in 0..n_r {
            let s = &walks.region[j];
            let w: Vec<u64> = walks.w[walks.offsets[j]..walks.offsets[j + 1]]
                .iter()
                .map(|v| v.to_bits())
                .collect();
            let next = reps.len();
            let i = *first
                .entry((s.distance, s.bonds_meeting, w))
                .or_insert(next);
            if i == next {
                reps.push(j);
            }
            rep.push(i);
        }
        let mut distinct = vec![0.0f64; reps.len() * n_t];
        if n_t > 0 {
            distinct
                .par_chunks_mut(n_t)
                .zip(&reps)
                .for_each(|(out, &j)| {
                    let series = walks.series(j, t_max);
                    let n_y = walks.region[j].bonds_meeting as f64;
                    for ((o, &t), &c) in out.iter_mut().zip(times).zip(&tail) {
                        *o = (series.exposure_truncated(t) + n_y * c).min(t);
                    }
                });
        }
        let by_source: Vec<f64> = rep
            .iter()
            .flat_map(|&i| distinct[i * n_t..(i + 1) * n_t].iter().copied())
            .collect();
        let mut values = vec![0.0f64; n_r * n_t];
        values
            .par_chunks_mut(n_r.max(1))
            .enumerate()
            .for_each(|(k, row)| {
                for (j, v) in row.iter_mut().enumerate() {
                    *v = by_source[j * n_t + k];
                }
            });
        Values {
            values,
            tail,
            order: walks.order,
        }
    }
}

fn max_time(times: &[f64]) -> f64 {
    times.iter().fold(0.0f64, |m, &t| m.max(t))
}

/// The exposure times `T_i(t)` of every source to one observable support, at every time.
#[derive(Debug, Clone)]
pub struct Exposure {
    times: Vec<f64>,
    region: Vec<RegionSource>,
    /// Shared by every support of the same region shape ([`ExposureCache`]).
    values: Arc<Values>,
}

impl Exposure {
    /// Computes `T_i(t)` for the sources of `instances` at `times` (≥ 0) for the observable
    /// support `x` (parallel over sources; the result does not depend on the thread count).
    pub fn new(
        graph: &WalkGraph,
        x: &[usize],
        instances: &[Instance],
        times: &[f64],
    ) -> Result<Exposure, Unavailable> {
        let walks = Walks::new(graph, x, instances, max_time(times))?;
        let values = Values::compute(&walks, times);
        Ok(Exposure {
            times: times.to_vec(),
            region: walks.region,
            values: Arc::new(values),
        })
    }

    /// The times.
    pub fn times(&self) -> &[f64] {
        &self.times
    }

    /// The order `K` of the walk sums.
    pub fn order(&self) -> usize {
        self.values.order
    }

    /// The region sources, sorted by (distance, instance).
    pub fn region(&self) -> &[RegionSource] {
        &self.region
    }

    /// `T` of the region sources at time index `k`, in region order.
    pub fn at(&self, k: usize) -> &[f64] {
        let n = self.region.len();
        &self.values.values[k * n..(k + 1) * n]
    }

    /// An upper bound on `T_i(t_k)` for a source outside the region meeting `n_y` bonds.
    pub fn outside(&self, k: usize, n_y: usize) -> f64 {
        (n_y as f64 * self.values.tail[k]).min(self.times[k])
    }

    /// `C(t_k)` (see [`Walks::tail_per_bond`]).
    pub fn tail_per_bond(&self, k: usize) -> f64 {
        self.values.tail[k]
    }

    /// Whether `self` and `other` share one computation (a support reused the exposure of a
    /// translate with the same region shape).
    pub fn shares_values_with(&self, other: &Exposure) -> bool {
        Arc::ptr_eq(&self.values, &other.values)
    }
}

/// Exposures of many supports of one run, computed once per *region shape*.
///
/// The exposure of support `X` is a function of its region (bonds, `J̃`, sources with
/// `n_Y`, the order `K`, in the order the computation visits them), of the growth `q` and of
/// the times; nothing else is read. The region is found by a bounded search costing time
/// proportional to it, and when it equals, number for number (`J̃` to the bit, no boundary
/// or different coupling inside it), the region of a support already computed (a translate on
/// a uniform lattice, or the same support again), the computed values are reused: they are
/// exactly what a fresh computation would give, since it would perform the same operations on
/// the same numbers. Otherwise they are computed afresh. Which supports came first changes
/// only what is reused, never a value.
///
/// Memory: the kept shapes and values are dropped when they pass a budget (a number of stored
/// numbers); a dropped shape is recomputed if it comes again, with the same bits.
#[derive(Debug)]
pub struct ExposureCache {
    budget: usize,
    /// `q` and the times (bits) the kept values belong to.
    key: Option<(u64, Vec<u64>)>,
    lookup: HashMap<u64, Vec<usize>>,
    shapes: Vec<(Region, Arc<Values>)>,
    held: usize,
    computed: usize,
    reused: usize,
}

/// Where the values of one support of a batch come from.
enum Source {
    Kept(Arc<Values>),
    New(usize),
}

impl ExposureCache {
    /// An empty cache keeping at most about `budget` numbers (8 bytes each).
    pub fn new(budget: usize) -> ExposureCache {
        ExposureCache {
            budget,
            key: None,
            lookup: HashMap::new(),
            shapes: Vec::new(),
            held: 0,
            computed: 0,
            reused: 0,
        }
    }

    /// `(computed, reused)`: how many supports were computed afresh and how many reused the
    /// values of an equal region shape, since the cache was made.
    pub fn counts(&self) -> (usize, usize) {
        (self.computed, self.reused)
    }

    fn clear(&mut self) {
        self.lookup.clear();
        self.shapes.clear();
        self.held = 0;
    }

    /// The exposure of one support (see [`ExposureCache::exposures`]).
    pub fn exposure(
        &mut self,
        graph: &WalkGraph,
        index: &InstanceIndex,
        times: &[f64],
        x: &[usize],
    ) -> Result<Exposure, Unavailable> {
        let mut out = self.exposures(graph, index, times, &[x]);
        out.pop().unwrap_or(Err(Unavailable::GlobalObservable))
    }

    /// The exposures of `supports` at `times` (in the order given), equal to the bit to
    /// [`Exposure::new`] of each, for the instances of `index`. The region searches run in
    /// parallel, the shapes are matched in the order given, and the new shapes are computed
    /// in parallel: the result does not depend on the thread count.
    pub fn exposures(
        &mut self,
        graph: &WalkGraph,
        index: &InstanceIndex,
        times: &[f64],
        supports: &[&[usize]],
    ) -> Vec<Result<Exposure, Unavailable>> {
        let key = (
            graph.growth.to_bits(),
            times.iter().map(|t| t.to_bits()).collect::<Vec<u64>>(),
        );
        if self.key.as_ref() != Some(&key) {
            self.clear();
            self.key = Some(key);
        }
        let t_max = max_time(times);
        let regions: Vec<Result<(Region, u64), Unavailable>> = supports
            .par_iter()
            .with_min_len(8)
            .map(|x| {
                Region::build(graph, index, x, t_max).map(|r| {
                    let h = r.shape_hash();
                    (r, h)
                })
            })
            .collect();
        // Match in the order given: kept shapes first, then shapes new in this batch.
        let mut fresh: HashMap<u64, Vec<usize>> = HashMap::new();
        let mut new_shapes: Vec<usize> = Vec::new();
        let mut from: Vec<Option<Source>> = Vec::with_capacity(regions.len());
        for (a, r) in regions.iter().enumerate() {
            let Ok((region, h)) = r else {
                from.push(None);
                continue;
            };
            let kept = self.lookup.get(h).and_then(|c| {
                c.iter()
                    .copied()
                    .find(|&i| self.shapes[i].0.same_shape(region))
            });
            if let Some(i) = kept {
                from.push(Some(Source::Kept(self.shapes[i].1.clone())));
                self.reused += 1;
                continue;
            }
            let list = fresh.entry(*h).or_default();
            let same = list.iter().copied().find(|&p| {
                let b = new_shapes[p];
                matches!(&regions[b], Ok((other, _)) if other.same_shape(region))
            });
            match same {
                Some(p) => {
                    from.push(Some(Source::New(p)));
                    self.reused += 1;
                }
                None => {
                    list.push(new_shapes.len());
                    from.push(Some(Source::New(new_shapes.len())));
                    new_shapes.push(a);
                    self.computed += 1;
                }
            }
        }
        let q = graph.growth;
        let computed: Vec<Arc<Values>> = new_shapes
            .par_iter()
            .map(|&a| match &regions[a] {
                Ok((region, _)) => Arc::new(Values::compute(&Walks::from_region(q, region), times)),
                Err(_) => Arc::new(Values {
                    values: Vec::new(),
                    tail: Vec::new(),
                    order: 0,
                }),
            })
            .collect();
        // Keep the new shapes for later batches, within the budget.
        for (p, &a) in new_shapes.iter().enumerate() {
            if let Ok((region, h)) = &regions[a] {
                let size = region.size() + computed[p].values.len() + computed[p].tail.len();
                if self.held + size > self.budget {
                    self.clear();
                }
                if size <= self.budget {
                    self.held += size;
                    self.lookup.entry(*h).or_default().push(self.shapes.len());
                    self.shapes.push((region.clone(), computed[p].clone()));
                }
            }
        }
        regions
            .into_iter()
            .zip(from)
            .map(|(r, f)| {
                let (region, _) = r?;
                let values = match f {
                    Some(Source::Kept(v)) => v,
                    Some(Source::New(p)) => computed[p].clone(),
                    // Not reached: every support with a region has a source.
                    None => return Err(Unavailable::GlobalObservable),
                };
                Ok(Exposure {
                    times: times.to_vec(),
                    region: region.sources,
                    values,
                })
            })
            .collect()
    }
}

/// Whether a family is bounded (its sources may sit on bonds).
pub fn is_bounded(f: &Family) -> bool {
    family::constants(f).b.is_finite()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::lattice::{Boundary, Geometry};

    fn site_instances(n: usize) -> Vec<Instance> {
        (0..n)
            .map(|s| Instance {
                source: 0,
                support: vec![s],
                bond: None,
                delta: 0.1,
                family: Family::Uniform,
                mean_offset: 0.0,
                mean_offset_uncertainty: 0.0,
            })
            .collect()
    }

    /// The committed NumPy fixtures (tests/reference/lieb_robinson/make_fixtures.py): exact
    /// `‖[Z_0(τ), Z_j]‖` for XXZ with J = 1, Δ = 0.5 and random Z fields never exceed
    /// `s_O·min(1, u_j(τ))` with `s_O = 2` and `J̃ = 2` (the centred norm of the bond term,
    /// whose eigenvalues are Δ, Δ, 2 − Δ, −2 − Δ).
    #[test]
    fn the_bound_holds_on_exact_commutators_from_the_numpy_fixtures() {
        for text in [
            include_str!("../../tests/reference/lieb_robinson/chain6.json"),
            include_str!("../../tests/reference/lieb_robinson/square3x3.json"),
        ] {
            let v: serde_json::Value = serde_json::from_str(text).unwrap();
            let shape: Vec<usize> = v["shape"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_u64().unwrap() as usize)
                .collect();
            let geometry = if shape.len() == 1 {
                Geometry::Chain
            } else {
                Geometry::Square
            };
            let lattice = Lattice::regular(geometry, &shape, Boundary::Open).unwrap();
            let bonds: Vec<[usize; 2]> = v["bonds"]
                .as_array()
                .unwrap()
                .iter()
                .map(|b| {
                    [
                        b[0].as_u64().unwrap() as usize,
                        b[1].as_u64().unwrap() as usize,
                    ]
                })
                .collect();
            assert!(lattice.same_bonds(&bonds), "fixture bond order");
            let n = lattice.n_sites();
            let inst = site_instances(n);
            let graph = WalkGraph::new(&lattice, &vec![2.0; lattice.n_bonds()], 1, &inst).unwrap();
            let taus: Vec<f64> = v["taus"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect();
            let walks = Walks::new(&graph, &[0], &inst, 2.0).unwrap();
            let mut checked = 0;
            let mut tight = 0.0f64;
            for (j, src) in walks.region().iter().enumerate() {
                if src.distance == 0 {
                    continue;
                }
                let series = walks.series(j, 2.0);
                for (a, &tau) in taus.iter().enumerate() {
                    let exact = v["commutator_norms"][a][src.instance].as_f64().unwrap();
                    let u = series.u_truncated(tau)
                        + src.bonds_meeting as f64 * walks.u_tail_per_bond(tau);
                    let bound = 2.0 * u.min(1.0);
                    assert!(
                        exact <= bound * (1.0 + 1e-9) + 1e-12,
                        "site {} τ={tau}: {exact} > {bound}",
                        src.instance
                    );
                    if bound < 2.0 && exact > 1e-3 {
                        tight = tight.max(exact / bound);
                    }
                    checked += 1;
                }
            }
            assert!(checked >= 5 * 41);
            // The bound is not vacuous: somewhere below the cap it is within a factor 100.
            assert!(tight > 0.01, "largest exact/bound below the cap: {tight}");
        }
    }

    /// On a chain with uniform J̃ the first walk sums are small path counts (exact enumeration
    /// by hand): from X = {0} on an open chain, a1 = J on bond 0; W_1(site 1) = J (bond 0
    /// meets site 1), W_2(site 1) = J²·(1 + 1) (bond 0 meets bonds 0 and 1, both meet site 1),
    /// W_2(site 2) = J² (only bond 1 meets site 2).
    #[test]
    fn walk_sums_count_paths() {
        let lattice = Lattice::regular(Geometry::Chain, &[8], Boundary::Open).unwrap();
        let inst = site_instances(8);
        let graph = WalkGraph::new(&lattice, &[1.5; 7], 1, &inst).unwrap();
        let walks = Walks::new(&graph, &[0], &inst, 1.0).unwrap();
        let j_of = |site: usize| {
            walks
                .region()
                .iter()
                .position(|s| s.instance == site)
                .unwrap()
        };
        let j = 1.5f64;
        assert_eq!(walks.walk_sum(j_of(1), 1), j);
        assert_eq!(walks.walk_sum(j_of(1), 2), 2.0 * j * j);
        assert_eq!(walks.walk_sum(j_of(2), 1), 0.0);
        assert_eq!(walks.walk_sum(j_of(2), 2), j * j);
        // q = J̃·3 on a chain (a bond meets itself and two others).
        assert_eq!(graph.growth(), 4.5);
    }

    /// Huge times do not overflow: W_k grows like 5^k on a long chain with J̃ = 5, and T stays
    /// finite and at most t, with T(t) − t bounded as the light cone passes.
    #[test]
    fn large_times_do_not_overflow() {
        let lattice = Lattice::regular(Geometry::Chain, &[4001], Boundary::Open).unwrap();
        let inst = site_instances(4001);
        let graph = WalkGraph::new(&lattice, &vec![5.0; 4000], 1, &inst).unwrap();
        let times = [0.0, 1.0, 10.0, 20.0];
        let e = Exposure::new(&graph, &[2000], &inst, &times).unwrap();
        assert!(e.order() > 300, "order {}", e.order());
        for (k, &t) in times.iter().enumerate() {
            for &v in e.at(k) {
                assert!(v.is_finite() && v >= 0.0 && v <= t);
            }
        }
        // The source 10 sites away is inside the light cone at t = 20: exposed almost all the time.
        let j = e.region().iter().position(|s| s.instance == 2010).unwrap();
        assert!(e.at(3)[j] > 19.0 && e.at(3)[j] <= 20.0);
    }

    /// One site instance per site and one bond instance per bond.
    fn site_and_bond_instances(l: &Lattice) -> Vec<Instance> {
        let mut inst = site_instances(l.n_sites());
        for (e, &[a, b]) in l.bonds().iter().enumerate() {
            inst.push(Instance {
                source: 1,
                support: vec![a.min(b) as usize, a.max(b) as usize],
                bond: Some(e),
                delta: 0.02,
                family: Family::TwoPoint,
                mean_offset: 0.0,
                mean_offset_uncertainty: 0.0,
            });
        }
        inst
    }

    /// Asserts that two exposures are equal to the last bit.
    fn assert_same_bits(a: &Exposure, b: &Exposure, what: &str) {
        assert_eq!(a.order(), b.order(), "{what}");
        assert_eq!(a.region(), b.region(), "{what}");
        for k in 0..a.times().len() {
            assert_eq!(
                a.tail_per_bond(k).to_bits(),
                b.tail_per_bond(k).to_bits(),
                "{what}"
            );
            let (x, y) = (a.at(k), b.at(k));
            assert!(
                x.iter().zip(y).all(|(u, v)| u.to_bits() == v.to_bits()),
                "{what} k={k}"
            );
        }
    }

    /// Exact reuse across translates: on uniform open and periodic chains and an open square
    /// lattice, every single-site and nearest-pair support taken from the cache (most of them
    /// reusing a translate's values) equals a fresh computation to the last bit, and the
    /// interior supports did reuse. With bond norms that differ from bond to bond no region
    /// has the shape of another, and nothing is reused.
    #[test]
    fn translated_supports_reuse_exposures_bit_for_bit() {
        let cases = [
            (
                Geometry::Chain,
                vec![600],
                Boundary::Open,
                1.0,
                vec![0.0, 0.5, 1.0, 2.0],
            ),
            (
                Geometry::Chain,
                vec![120],
                Boundary::Periodic,
                1.0,
                vec![0.3, 1.0],
            ),
            (
                Geometry::Square,
                vec![61, 61],
                Boundary::Open,
                1.0,
                vec![0.0, 0.01, 0.02],
            ),
            (
                Geometry::Chain,
                vec![120],
                Boundary::Open,
                -1.0,
                vec![0.5, 1.0],
            ),
        ];
        for (g, shape, b, norm, times) in cases {
            let l = Lattice::regular(g, &shape, b).unwrap();
            let inst = site_and_bond_instances(&l);
            // norm < 0: bond norms 1 + e/1000, all different.
            let norms: Vec<f64> = (0..l.n_bonds())
                .map(|e| {
                    if norm > 0.0 {
                        norm
                    } else {
                        1.0 + e as f64 / 1000.0
                    }
                })
                .collect();
            let graph = WalkGraph::new(&l, &norms, 1, &inst).unwrap();
            let index = InstanceIndex::new(&inst, l.n_sites());
            let mut supports: Vec<Vec<usize>> = if g == Geometry::Square {
                // The middle row (sites 30·61 + y) and its horizontal pairs.
                let row: Vec<usize> = (0..61).map(|y| 30 * 61 + y).collect();
                let mut v: Vec<Vec<usize>> = row.iter().map(|&s| vec![s]).collect();
                v.extend(row.windows(2).map(|w| w.to_vec()));
                v
            } else {
                let mut v: Vec<Vec<usize>> = (0..l.n_sites()).map(|s| vec![s]).collect();
                v.extend(
                    l.bonds()
                        .iter()
                        .map(|&[a, b]| vec![a.min(b) as usize, a.max(b) as usize]),
                );
                v
            };
            supports.iter_mut().for_each(|s| s.sort_unstable());
            let refs: Vec<&[usize]> = supports.iter().map(|s| s.as_slice()).collect();
            let mut cache = ExposureCache::new(1 << 22);
            // Two batches, so that kept shapes and shapes new in a batch are both exercised.
            let half = refs.len() / 2;
            let mut got = cache.exposures(&graph, &index, &times, &refs[..half]);
            got.extend(cache.exposures(&graph, &index, &times, &refs[half..]));
            for (x, e) in supports.iter().zip(&got) {
                let fresh = Exposure::new(&graph, x, &inst, &times).unwrap();
                assert_same_bits(e.as_ref().unwrap(), &fresh, &format!("{g:?} {b:?} {x:?}"));
            }
            let (computed, reused) = cache.counts();
            assert_eq!(computed + reused, supports.len());
            if norm > 0.0 {
                // On a periodic lattice the neighbour lists of the sites at the seam (where
                // the wrapped bonds are numbered) are in another order, so the regions that
                // contain the seam are computed afresh: fewer reuses there.
                let wanted = match (g, b) {
                    (_, Boundary::Periodic) => 10,
                    (Geometry::Square, _) => 20,
                    _ => supports.len() / 2,
                };
                assert!(
                    reused > wanted,
                    "{g:?} {b:?}: {computed} computed, {reused} reused"
                );
                // Interior single sites share one computation.
                let mid = if g == Geometry::Square {
                    30
                } else {
                    l.n_sites() / 2
                };
                let a = got[mid].as_ref().unwrap();
                assert!(a.shares_values_with(got[mid + 1].as_ref().unwrap()));
            } else {
                assert_eq!(reused, 0, "{g:?}: different couplings must not be reused");
            }
        }
    }

    #[test]
    fn unavailable_reasons_are_reported() {
        let lattice = Lattice::regular(Geometry::Chain, &[4], Boundary::Open).unwrap();
        let mut inst = site_instances(4);
        assert!(matches!(
            WalkGraph::new(&lattice, &[1.0; 3], 2, &inst),
            Err(Unavailable::InteractionRange(2))
        ));
        inst.push(Instance {
            source: 1,
            support: vec![0, 1],
            bond: Some(0),
            delta: 0.1,
            family: Family::Normal { sigma: 1.0 },
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
        });
        assert!(matches!(
            WalkGraph::new(&lattice, &[1.0; 3], 1, &inst),
            Err(Unavailable::UnboundedBondSource { .. })
        ));
        inst.pop();
        inst.push(Instance {
            source: 1,
            support: vec![0, 2],
            bond: None,
            delta: 0.1,
            family: Family::Uniform,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
        });
        assert!(matches!(
            WalkGraph::new(&lattice, &[1.0; 3], 1, &inst),
            Err(Unavailable::OffGraphSource { .. })
        ));
        inst.pop();
        let g = WalkGraph::new(&lattice, &[1.0; 3], 1, &inst).unwrap();
        assert!(matches!(
            Exposure::new(&g, &[], &inst, &[1.0]),
            Err(Unavailable::GlobalObservable)
        ));
    }
}
