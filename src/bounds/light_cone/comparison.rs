//! Comparison with an interior region (docs/method.md §5, "Comparison with an interior
//! region"): on a regular lattice with open boundaries whose bonds all carry the same bound
//! `J̃`, the lattice embeds in the infinite lattice `Z^d` (sites to sites, bonds to bonds,
//! injectively), so every walk of the real lattice is a walk of `Z^d` with the same weight, and
//! the walk sums, the exposures `T_i(t)` and the tail `C(t)` of a single-site support are at
//! most those of one site of `Z^d` with every bond at `J̃`. Those are computed once, on a
//! lattice of side `2K + 5` that the region of its centre never leaves (so its numbers are
//! those of `Z^d`: a bond source at distance `K` has its far end at `K + 1`, and the bonds
//! meeting it, counted in `n_Y`, reach `K + 2`), and kept as a table indexed by the offset of a source's support from the
//! term's site. A term whose region meets the boundary takes the table's values: an upper
//! bound, looser than its exact region. A term whose region does not meet it keeps its exact
//! region (equal to the table's, bit for bit, as a unit test checks).

use super::exposure::max_time;
use super::tail::choose_order;
use super::walks::ln_rounding_margin;
use super::*;

/// Largest comparison lattice (sites); past it no comparison is made (a cubic lattice at high
/// orders).
const MAX_COMPARISON_SITES: usize = 1 << 19;

/// What a comparison needs before its table is computed: the lattice's coordinates, the order
/// `K` of the comparison region and where each instance's support sits.
#[derive(Debug, Clone, PartialEq)]
pub struct ComparisonPlan {
    shape: Vec<usize>,
    strides: Vec<usize>,
    n_sites: usize,
    jtilde: f64,
    growth: f64,
    order: usize,
    /// Per instance: `kind · n_sites + site`, where kind 0 is a single site and kind `1 + a`
    /// the bond from `site` one step forward along axis `a`.
    slots: Vec<usize>,
}

/// The comparison table: `T` of every support offset at every time, and `C(t)`, for one site
/// of the infinite lattice with every bond at `J̃`.
#[derive(Debug, Clone)]
pub struct Comparison {
    plan: ComparisonPlan,
    /// Row-major strides of the offset box (side `2L_a − 1` per axis).
    box_strides: Vec<usize>,
    box_len: usize,
    /// `table[(k · kinds + kind) · box_len + box index]`; 0 beyond the region (distance > K).
    table: Vec<f64>,
    tail: Vec<f64>,
    region_sources: usize,
    /// The factor applied to compared terms ([`Comparison::factor`]).
    factor: f64,
}

fn coords(site: usize, shape: &[usize], strides: &[usize]) -> Vec<usize> {
    shape
        .iter()
        .zip(strides)
        .map(|(&l, &st)| (site / st) % l)
        .collect()
}

/// The slot of a support (module `ComparisonPlan::slots`), `None` if it is neither one site
/// nor one bond of the regular lattice.
fn slot_of(support: &[usize], shape: &[usize], strides: &[usize], n: usize) -> Option<usize> {
    match *support {
        [s] if s < n => Some(s),
        [a, b] => {
            let (lo, hi) = (a.min(b), a.max(b));
            if hi >= n || lo == hi {
                return None;
            }
            let c = coords(lo, shape, strides);
            (0..shape.len())
                .find(|&ax| hi - lo == strides[ax] && c[ax] + 1 < shape[ax])
                .map(|ax| (1 + ax) * n + lo)
        }
        _ => None,
    }
}

impl ComparisonPlan {
    /// The plan for the run's graph and instances at times up to `max(times)`, or `None` when
    /// the comparison does not apply: a lattice that is not a regular chain, square or cubic
    /// lattice with open boundaries, bonds whose `J̃` are not all equal (to the bit) and
    /// positive, or an instance whose support is neither one site nor one bond.
    pub fn new(graph: &WalkGraph, instances: &[Instance], times: &[f64]) -> Option<ComparisonPlan> {
        use crate::model::lattice::Boundary;
        let lattice = graph.lattice;
        let d = lattice.geometry().dimension();
        let shape = lattice.shape().to_vec();
        if d == 0 || shape.len() != d || lattice.boundary() != Boundary::Open {
            return None;
        }
        let jtilde = *graph.jtilde.first()?;
        if !(jtilde > 0.0 && jtilde.is_finite())
            || graph.jtilde.iter().any(|j| j.to_bits() != jtilde.to_bits())
        {
            return None;
        }
        let mut strides = vec![1usize; d];
        for a in (0..d - 1).rev() {
            strides[a] = strides[a + 1] * shape[a + 1];
        }
        let n = lattice.n_sites();
        let slots = instances
            .iter()
            .map(|i| slot_of(&i.support, &shape, &strides, n))
            .collect::<Option<Vec<usize>>>()?;
        // q of Z^d: a bond meets itself and 4d − 2 others; the same expression as
        // `WalkGraph::new`, so the comparison lattice's growth is these bits.
        let growth = jtilde * (4 * d - 1) as f64;
        let order = choose_order(jtilde, growth, max_time(times));
        let side = 2 * (order + 2) + 1;
        side.checked_pow(d as u32)
            .filter(|&s| s <= MAX_COMPARISON_SITES)?;
        Some(ComparisonPlan {
            shape,
            strides,
            n_sites: n,
            jtilde,
            growth,
            order,
            slots,
        })
    }

    /// The order `K` of the comparison region.
    pub fn order(&self) -> usize {
        self.order
    }

    /// How far from a term's site the comparison region's numbers reach: the sources within
    /// distance `K` and the bonds meeting them, `K + 2`.
    fn reach(&self) -> usize {
        self.order + 2
    }

    /// Whether the region of the single-site support `site` cannot meet the boundary: every
    /// site within distance `K + 2` exists (then its region is the comparison region, number
    /// for number, and the exact computation is kept).
    pub fn interior(&self, site: usize) -> bool {
        let r = self.reach();
        coords(site, &self.shape, &self.strides)
            .iter()
            .zip(&self.shape)
            .all(|(&c, &l)| c >= r && c + r < l)
    }

    /// An upper bound on the number of sources of one term's region: the instances of the run,
    /// or the sites and bonds within distance `K` of a site of `Z^d`.
    pub fn region_estimate(&self, n_instances: usize) -> usize {
        let d = self.shape.len();
        let ball = (2 * self.order + 1).saturating_pow(d as u32);
        n_instances.min(ball.saturating_mul(1 + d))
    }

    /// Computes the table: the exposure of the centre of a lattice of side `2K + 5` with every
    /// bond at `J̃`, for one source on every site and bond whose offset from the centre can be
    /// the offset of a real source from a real term.
    pub fn build(self, times: &[f64]) -> Option<Comparison> {
        use crate::model::lattice::{Boundary, Lattice};
        let d = self.shape.len();
        let r = self.reach();
        let side = 2 * r + 1;
        let geometry = match d {
            1 => crate::model::lattice::Geometry::Chain,
            2 => crate::model::lattice::Geometry::Square,
            _ => crate::model::lattice::Geometry::Cubic,
        };
        let aux = Lattice::regular(geometry, &vec![side; d], Boundary::Open).ok()?;
        let aux_strides: Vec<usize> = (0..d).map(|a| side.pow((d - 1 - a) as u32)).collect();
        let aux_shape = vec![side; d];
        let mut box_strides = vec![1usize; d];
        for a in (0..d - 1).rev() {
            box_strides[a] = box_strides[a + 1] * (2 * self.shape[a + 1] - 1);
        }
        let box_len = box_strides[0] * (2 * self.shape[0] - 1);
        // The box index of an aux site, if its offset from the centre is in the box.
        let in_box = |u: usize| -> Option<usize> {
            let c = coords(u, &aux_shape, &aux_strides);
            let mut idx = 0;
            for a in 0..d {
                let o = c[a] as i64 - r as i64;
                let reach = self.shape[a] as i64 - 1;
                if o.abs() > reach {
                    return None;
                }
                idx += (o + reach) as usize * box_strides[a];
            }
            Some(idx)
        };
        let blank = |support: Vec<usize>, bond: Option<usize>| Instance {
            source: 0,
            support,
            bond,
            delta: 0.0,
            family: Family::Uniform,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: None,
        };
        let mut instances = Vec::new();
        let mut where_: Vec<(usize, usize)> = Vec::new();
        for u in 0..aux.n_sites() {
            if let Some(b) = in_box(u) {
                instances.push(blank(vec![u], None));
                where_.push((0, b));
            }
        }
        for (e, &[u, w]) in aux.bonds().iter().enumerate() {
            let (u, w) = (u as usize, w as usize);
            let (Some(b), Some(_)) = (in_box(u), in_box(w)) else {
                continue;
            };
            let axis = (0..d).find(|&a| w - u == aux_strides[a])?;
            instances.push(blank(vec![u, w], Some(e)));
            where_.push((1 + axis, b));
        }
        let graph = WalkGraph::new(&aux, &vec![self.jtilde; aux.n_bonds()], 1, &instances).ok()?;
        let centre: usize = aux_strides.iter().map(|&s| r * s).sum();
        let exposure = Exposure::new(&graph, &[centre], &instances, times).ok()?;
        // The region must not reach the comparison lattice's boundary: the same K and q.
        if exposure.order() != self.order || graph.growth.to_bits() != self.growth.to_bits() {
            return None;
        }
        let kinds = 1 + d;
        let n_t = times.len();
        let mut table = vec![0.0f64; n_t * kinds * box_len];
        for k in 0..n_t {
            for (src, &v) in exposure.region().iter().zip(exposure.at(k)) {
                let (kind, b) = where_[src.instance];
                table[(k * kinds + kind) * box_len + b] = v;
            }
        }
        let tail = (0..n_t).map(|k| exposure.tail_per_bond(k)).collect();
        Some(Comparison {
            factor: (2.0 * ln_rounding_margin(self.order) + 1e-9).exp(),
            region_sources: exposure.region().len(),
            plan: self,
            box_strides,
            box_len,
            table,
            tail,
        })
    }
}

impl Comparison {
    /// The plan it was built from.
    pub fn plan(&self) -> &ComparisonPlan {
        &self.plan
    }

    /// The factor by which the compared terms' coefficients are multiplied: the square of the
    /// rounding margin and `1 + 10^{-9}`. Not needed for validity (the table values are upper
    /// bounds already); it makes the computed values of a compared term never fall below the
    /// computed values of its exact region, whose rounding up (the margin, the crossing found
    /// by Newton's method, the order of the sums over terms) can otherwise leave them a few
    /// units in the last place above a comparison value that is equal in exact arithmetic.
    pub fn factor(&self) -> f64 {
        self.factor
    }

    /// The number of sources in the comparison region (within the offset box).
    pub fn region_sources(&self) -> usize {
        self.region_sources
    }

    /// The length of one time row of the accumulator of [`Comparison::accumulate`]: one entry
    /// per site and kind (single site, bond forward along each axis).
    pub fn row_len(&self) -> usize {
        (1 + self.plan.shape.len()) * self.plan.n_sites
    }

    /// Where instance `i`'s values are accumulated in a row.
    pub fn slot(&self, i: usize) -> usize {
        self.plan.slots[i]
    }

    /// `C(t_k)` of the comparison region: `n_Y(i)·C(t_k)` bounds the orders above `K` of every
    /// real source of a compared term.
    pub fn tail_per_bond(&self, k: usize) -> f64 {
        self.tail[k]
    }

    /// The comparison value of `T_i(t_k)` for a source in `slot` and the term on `site`
    /// (0 beyond the comparison region: the tail covers it).
    pub fn value(&self, k: usize, slot: usize, site: usize) -> f64 {
        let n = self.plan.n_sites;
        let (kind, s) = (slot / n, slot % n);
        let (x, y) = (
            coords(site, &self.plan.shape, &self.plan.strides),
            coords(s, &self.plan.shape, &self.plan.strides),
        );
        let mut b = 0;
        for a in 0..x.len() {
            b += (y[a] + self.plan.shape[a] - 1 - x[a]) * self.box_strides[a];
        }
        let kinds = 1 + self.plan.shape.len();
        self.table[(k * kinds + kind) * self.box_len + b]
    }

    /// `row[slot] += c · T(t_k)` for every slot, for the term on `site`: the innermost axis is
    /// contiguous in both the row and the table. Each entry receives one product, so the sum
    /// over terms, taken in term order by the caller, is deterministic.
    pub fn accumulate(&self, k: usize, c: f64, site: usize, row: &mut [f64]) {
        let p = &self.plan;
        let d = p.shape.len();
        let n = p.n_sites;
        let kinds = 1 + d;
        let x = coords(site, &p.shape, &p.strides);
        let last = p.shape[d - 1];
        let n_rows = n / last;
        for kind in 0..kinds {
            let table = &self.table[(k * kinds + kind) * self.box_len..][..self.box_len];
            let out = &mut row[kind * n..(kind + 1) * n];
            for row_index in 0..n_rows {
                let s0 = row_index * last;
                let mut b0 = last - 1 - x[d - 1];
                for (a, &xa) in x.iter().enumerate().take(d - 1) {
                    let y = (s0 / p.strides[a]) % p.shape[a];
                    b0 += (y + p.shape[a] - 1 - xa) * self.box_strides[a];
                }
                for (o, &v) in out[s0..s0 + last].iter_mut().zip(&table[b0..b0 + last]) {
                    *o += c * v;
                }
            }
        }
    }
}
