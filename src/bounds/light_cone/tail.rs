//! The tail of the walk series: the order `K` at which the exact walk sums stop, and the bound
//! `C(t)` on everything above it (docs/method.md §5, "Truncation and the region").
//!
//! For `k > K`, `‖a(k)‖_∞ ≤ q^{k−K} ‖a(K)‖_∞`, so the dropped part of `∫_0^t u_i` is at most
//! `n_Y(i)·C(t)` with `C(t) = ‖a(K)‖_∞ q^{−K−1}/2 · Σ_{m ≥ K+2} (2tq)^m/m!`; the Poisson tail is
//! bounded by its first term over `1 − x/(m+1)`. `K` is the smallest order whose a-priori
//! `C(t_max)` meets the tolerance.

use super::*;

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
pub(super) fn choose_order(a1_max: f64, q: f64, t_max: f64) -> usize {
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

impl Walks {
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
}
