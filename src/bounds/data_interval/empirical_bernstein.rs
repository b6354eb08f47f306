//! The predictable plug-in empirical-Bernstein confidence interval for a bounded mean.
//!
//! Exists as the closed-form, O(R) alternative to the betting interval (used where a root
//! search per point is too costly). Reproduces confseq 0.0.11's `predmix_empbern_ci(x, alpha)`:
//! `predmix_empbern_cs(x, alpha, truncation=1/2, fixed_n=n)` read at t = n, i.e. lower bound
//! from `z` and upper bound `1 − (lower bound from 1 − z)`, each at α/2. Note: confseq's
//! `predmix_empbern_ci` does not pass its `running_intersection` argument on, so the
//! reference takes no running intersection; neither does this (doing so would be valid too,
//! and could only narrow the interval). Reference: Waudby-Smith & Ramdas, JRSS-B 2024,
//! arXiv 2010.09686 (its predictable plug-in empirical-Bernstein interval; theorem and equation
//! numbers not checked here).
//!
//! Lower bound at level a (on `z ∈ [0, 1]`), with `λ_i = min(1/2, lambda_predmix_eb)`,
//! `ψ(λ) = −ln(1 − λ) − λ`, `v_i = (z_i − μ̂_{i−1})²`, `μ̂_0 = 0`, `μ̂_t = Σ_{j≤t} z_j / t`:
//! `l = max(0, Σλ_i z_i/Σλ_i − (ln(1/a) + Σ v_i ψ(λ_i))/Σλ_i)`.

use super::{map_back, predmix_lambdas, scale, trivial, U};

/// Two-sided confidence interval, at total failure probability `alpha`, for the common mean of
/// independent values `values` known to lie in [lo, hi], by predictable plug-in empirical
/// Bernstein (confseq 0.0.11 `predmix_empbern_ci`). Values outside [lo, hi] are clamped first;
/// the result lies in [lo, hi] and is rounded outward. Empty `values`, `lo >= hi` or `alpha`
/// outside (0, 1) give `[lo, hi]`.
pub fn empirical_bernstein_interval(values: &[f64], lo: f64, hi: f64, alpha: f64) -> [f64; 2] {
    if trivial(values, lo, hi, alpha) {
        return [lo, hi];
    }
    let z = scale(values, lo, hi);
    let l = lower(&z, alpha / 2.0);
    let flipped: Vec<f64> = z.iter().map(|&v| 1.0 - v).collect();
    let u = 1.0 - lower(&flipped, alpha / 2.0);
    // l ≤ u always holds in exact arithmetic up to the rounding slack; keep the order.
    if l <= u {
        map_back(l, u, lo, hi)
    } else {
        map_back(u, l, lo, hi)
    }
}

/// One-sided lower bound at level `a` for values in [0, 1], rounded down.
///
/// Precision (first order in u = 2⁻⁵³, recursive sums in the recorded order, as NumPy's
/// `cumsum`): each of the three sums `Σλ`, `Σλz`, `Σvψ` over n terms of one sign has relative
/// error ≤ (n + 3)u including the per-term products and the squares in `v` (`ψ` from
/// `−ln_1p(−λ) − λ` has absolute error ≤ 3uλ, which adds ≤ 3u·max v ≤ 3u to the margin term);
/// the two quotients add 2u each. So the computed `wmean − margin` is within
/// `(2n + 10)u(|wmean| + |margin|) + 4u` of the exact value; twice that is subtracted.
fn lower(z: &[f64], a: f64) -> f64 {
    let lam = predmix_lambdas(z, 0.5, a);
    let mut sum_lam = 0.0;
    let mut sum_lam_z = 0.0;
    let mut sum_v_psi = 0.0;
    let mut sum_z = 0.0;
    let mut mu_prev = 0.0;
    for (i, (&zi, &li)) in z.iter().zip(&lam).enumerate() {
        let d = zi - mu_prev;
        let v = d * d;
        let psi = -(-li).ln_1p() - li;
        sum_v_psi += v * psi;
        sum_lam += li;
        sum_lam_z += li * zi;
        sum_z += zi;
        mu_prev = sum_z / (i + 1) as f64;
    }
    let wmean = sum_lam_z / sum_lam;
    let margin = ((1.0 / a).ln() + sum_v_psi) / sum_lam;
    let n = z.len() as f64;
    let slack = 2.0 * ((2.0 * n + 10.0) * U * (wmean.abs() + margin.abs()) + 4.0 * U);
    let l = wmean - margin - slack;
    if l.is_nan() {
        0.0
    } else {
        l.max(0.0)
    }
}

#[cfg(test)]
mod tests {
    use super::super::fixtures;
    use super::*;

    /// Against confseq 0.0.11 `predmix_empbern_ci(x, alpha)`
    /// (`tests/reference/data_interval/betting.json`, field `empbern`): to 1e-9 relative, never
    /// narrower.
    #[test]
    fn matches_confseq_predmix_empbern_ci() {
        for (i, c) in fixtures::cases().iter().enumerate() {
            let [l, u] = empirical_bernstein_interval(&c.x, 0.0, 1.0, c.alpha);
            fixtures::assert_outward_close(&format!("case {i} ({})", c.kind), [l, u], c.empbern);
        }
    }
}
