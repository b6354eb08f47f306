//! The walk sums `W_k(i)` of one support: the recursion `a(k+1)_e' = J̃_e' Σ_{e meets e'} a(k)_e`
//! over the region's bonds, kept as mantissas with a running power of two so that nothing
//! overflows (docs/method.md §5, "Overflow and rounding"), and the per-source series built
//! from them.

use rayon::prelude::*;

use super::*;

/// The walk sums of one observable support: the region, the scaled `W_k(i)` of every source in
/// it, and what the tail bound needs.
#[derive(Debug, Clone)]
pub struct Walks {
    /// The order `K`: `W_1..W_K` are exact, the rest is covered by the tail bound.
    pub(super) order: usize,
    /// `q` of the graph.
    pub(super) growth: f64,
    /// `ln ‖a(K)‖_∞` (−∞ if `a ≡ 0`).
    pub(super) ln_a_max: f64,
    /// `ln k!` for `k = 0..=K+2`.
    pub(super) ln_fact: Vec<f64>,
    /// The logarithm of the relative rounding margin (module header).
    pub(super) ln_margin: f64,
    /// The power of two of `a(k)`, `k = 1..=K` (index `k − 1`).
    exponents: Vec<i32>,
    /// Sources within distance `K`, sorted by (distance, instance).
    pub(super) region: Vec<RegionSource>,
    /// For region source `j` with distance `r ≥ 1`, the mantissas of `W_r..W_K` at
    /// `w[offsets[j]..offsets[j + 1]]` (empty for `r = 0`).
    pub(super) offsets: Vec<usize>,
    pub(super) w: Vec<f64>,
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
    pub(super) fn from_region(q: f64, reg: &Region) -> Walks {
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
        let ln_margin = ln_rounding_margin(order);
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

/// The logarithm of the relative rounding margin of order `K` (module header of the light
/// cone): `64·2^{-52}·(K+3)² ln(K+3) + 10^{-12}`.
pub(super) fn ln_rounding_margin(order: usize) -> f64 {
    let kf = order as f64 + 3.0;
    64.0 * f64::EPSILON * kf * kf * kf.ln() + 1e-12
}

/// `p · x^r` for `p ≥ 0`, `0 ≤ x ≤ 1`, through logarithms, so that it underflows only when the
/// product itself is below the smallest normal number (a huge `p` and a tiny `x^r` must not
/// give 0).
pub(super) fn times_power(p: f64, x: f64, r: usize) -> f64 {
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
