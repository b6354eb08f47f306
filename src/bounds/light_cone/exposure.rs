//! Exposure integration: the Lieb–Robinson series of one source ([`Series`]), evaluated and
//! integrated with the crossing of 1 found by Newton's method, and the exposure times
//! `T_i(t) = ∫_0^t min(1, u_i)` of every source of a support at every time ([`Exposure`]),
//! with the rounding margin and the cap at `t` (docs/method.md §5, "Exposure time").

use std::collections::HashMap;
use std::sync::Arc;

use rayon::prelude::*;

use super::walks::times_power;
use super::*;

/// The Lieb–Robinson series of one source, ready to evaluate at any `τ ≤ t_max`.
#[derive(Debug, Clone)]
pub struct Series {
    /// The source's distance `r` (first nonzero order).
    pub(super) r: usize,
    pub(super) tau_ref: f64,
    /// `γ_m = W_{r+m} (2τ_ref)^{r+m}/(r+m)!`, each at most `e^600`.
    pub(super) gamma: Vec<f64>,
    /// `γ_m / (r + m + 1)`, the coefficients of the integral (divided once, not per time:
    /// the same numbers, so the same bits).
    pub(super) gamma_integral: Vec<f64>,
    /// `(r+m)·γ_m`.
    pub(super) gamma_d: Vec<f64>,
    /// A time `τ_c` with `u(τ_c) ≥ 1` (`Some(0)` for a source meeting X); `None`: `u < 1` on
    /// `[0, t_max]`.
    pub(super) crossing: Option<f64>,
    /// `∫_0^{τ_c} u` truncated, computed once (0 without a crossing).
    pub(super) integral_at_crossing: f64,
    pub(super) margin: f64,
    pub(super) slack: f64,
}

impl Series {
    /// `(Σ γ_m x^{r+m}, Σ (r+m) γ_m x^{r+m})` by Horner.
    pub(super) fn poly(&self, x: f64) -> (f64, f64) {
        let mut p0 = 0.0;
        let mut p1 = 0.0;
        for (&g, &gd) in self.gamma.iter().zip(&self.gamma_d).rev() {
            p0 = p0 * x + g;
            p1 = p1 * x + gd;
        }
        (times_power(p0, x, self.r), times_power(p1, x, self.r))
    }

    /// `∫_0^τ u` truncated at order K (τ ≤ τ_ref), rounded up.
    pub(super) fn integral_truncated(&self, tau: f64) -> f64 {
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
pub(super) struct Values {
    /// `T` of the region sources, time-major: `values[k·R + j]`.
    pub(super) values: Vec<f64>,
    /// `C(t)` per time.
    pub(super) tail: Vec<f64>,
    pub(super) order: usize,
}

impl Values {
    /// `T_j(t)` for every source position `j` of the walks' region and every time (parallel
    /// over sources; each value is computed on its own, so the thread count does not matter).
    pub(super) fn compute(walks: &Walks, times: &[f64]) -> Values {
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

pub(super) fn max_time(times: &[f64]) -> f64 {
    times.iter().fold(0.0f64, |m, &t| m.max(t))
}

/// The exposure times `T_i(t)` of every source to one observable support, at every time.
#[derive(Debug, Clone)]
pub struct Exposure {
    pub(super) times: Vec<f64>,
    pub(super) region: Vec<RegionSource>,
    /// Shared by every support of the same region shape ([`ExposureCache`]).
    pub(super) values: Arc<Values>,
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
