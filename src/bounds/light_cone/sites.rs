//! The light cone of an observable seen from every single site, for the device errors of
//! docs/method.md §7: per site `i` the exposure `T_i(t) = ∫_0^t min(1, u_i)` (incoherent
//! errors) and `min(1, u_i(t))` itself (preparation errors), with `u_i` the walk-sum series of
//! §5 for the one-site support `{i}`.
//!
//! The sites are passed as one-site pseudo-instances ([`site_instances`]), so the region
//! search, the walk sums, the tail bound and the exposure integration are exactly those of the
//! noise sources; only `u_i(t)` at the time itself is new: the truncated series plus
//! `n_Y(i)` times the dropped part per bond ([`Walks::u_tail_per_bond`]).

use rayon::prelude::*;

use super::exposure::{max_time, Values};
use super::*;

/// One pseudo-instance per site (support `{i}`, no amplitude): what [`SiteCone::new`] takes.
pub fn site_instances(n_sites: usize) -> Vec<Instance> {
    (0..n_sites)
        .map(|i| Instance {
            source: 0,
            support: vec![i],
            bond: None,
            delta: 0.0,
            family: Family::TwoPoint,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: None,
        })
        .collect()
}

/// Per site of the region around an observable's support, `T_i(t_k)` and `min(1, u_i(t_k))`;
/// for the sites outside, the per-bond tails.
#[derive(Debug, Clone)]
pub struct SiteCone {
    /// The sites within the walk order of the support (`instance` is the site).
    pub region: Vec<RegionSource>,
    /// `T_i(t_k)` at `exposure[k·R + j]` for region site `j`.
    exposure: Vec<f64>,
    /// `min(1, u_i(t_k))` at `u[k·R + j]`.
    u: Vec<f64>,
    /// `C(t_k)`: a site outside the region meeting `n_Y` bonds has `T ≤ min(t, n_Y·C)`.
    tail_exposure: Vec<f64>,
    /// The dropped part of `u` per bond: outside the region `u ≤ n_Y·tail_u`.
    tail_u: Vec<f64>,
}

impl SiteCone {
    /// Computes the numbers for the observable support `x` at `times`; `sites` are
    /// [`site_instances`] of the graph's lattice.
    pub fn new(
        graph: &WalkGraph,
        x: &[usize],
        sites: &[Instance],
        times: &[f64],
    ) -> Result<SiteCone, Unavailable> {
        let t_max = max_time(times);
        let walks = Walks::new(graph, x, sites, t_max)?;
        let values = Values::compute(&walks, times);
        let n_r = walks.region.len();
        let n_t = times.len();
        // `min(1, u_i(t_k))` per region site (each element computed on its own, so the thread
        // count does not matter).
        let by_site: Vec<Vec<f64>> = (0..n_r)
            .into_par_iter()
            .map(|j| {
                let series = walks.series(j, t_max);
                let n_y = walks.region[j].bonds_meeting as f64;
                times
                    .iter()
                    .map(|&t| (series.u_truncated(t) + n_y * walks.u_tail_per_bond(t)).min(1.0))
                    .collect()
            })
            .collect();
        let mut u = vec![0.0f64; n_r * n_t];
        for (j, row) in by_site.iter().enumerate() {
            for (k, &v) in row.iter().enumerate() {
                u[k * n_r + j] = v;
            }
        }
        Ok(SiteCone {
            region: walks.region.clone(),
            exposure: values.values,
            u,
            tail_exposure: values.tail,
            tail_u: times.iter().map(|&t| walks.u_tail_per_bond(t)).collect(),
        })
    }

    /// `T_i(t_k)` of the region sites, in region order.
    pub fn exposure_at(&self, k: usize) -> &[f64] {
        let n = self.region.len();
        &self.exposure[k * n..(k + 1) * n]
    }

    /// `min(1, u_i(t_k))` of the region sites, in region order.
    pub fn u_at(&self, k: usize) -> &[f64] {
        let n = self.region.len();
        &self.u[k * n..(k + 1) * n]
    }

    /// `C(t_k)`.
    pub fn tail_exposure(&self, k: usize) -> f64 {
        self.tail_exposure[k]
    }

    /// The dropped part of `u(t_k)` per bond.
    pub fn tail_u(&self, k: usize) -> f64 {
        self.tail_u[k]
    }
}
