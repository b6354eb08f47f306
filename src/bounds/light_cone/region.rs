//! The region of one observable support: the bonds within distance `K − 1` and the sources
//! within distance `K`, found by a breadth-first search bounded at `K` (docs/method.md §5,
//! "Truncation and the region").
//!
//! Holds the per-site index of instances ([`InstanceIndex`]) that lets the search find the
//! sources in time proportional to the region, the per-thread scratch arrays that keep the
//! search from touching the whole lattice, and [`Region`] with the comparison that tells when
//! two supports have equal regions (so [`super::ExposureCache`] may reuse their values).

use super::tail::choose_order;
use super::*;

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
    pub(super) order: usize,
    pub(super) bond_dist: Vec<u32>,
    pub(super) jt: Vec<f64>,
    pub(super) meet_off: Vec<u32>,
    pub(super) meet: Vec<u32>,
    pub(super) sources: Vec<RegionSource>,
    pub(super) src_off: Vec<u32>,
    pub(super) src_bonds: Vec<u32>,
}

impl Region {
    /// The bonds within distance `K − 1` and the sources within distance `K` of `x`, with `K`
    /// the order needed for times up to `t_max` ([`choose_order`]).
    pub(super) fn build(
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
    pub(super) fn same_shape(&self, other: &Region) -> bool {
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
    pub(super) fn shape_hash(&self) -> u64 {
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
    pub(super) fn size(&self) -> usize {
        self.bond_dist.len() * 3
            + self.meet.len()
            + self.sources.len() * 3
            + self.src_bonds.len()
            + self.meet_off.len()
            + self.src_off.len()
    }
}
