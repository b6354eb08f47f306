//! Noise that changes during an evolution (docs/method.md §1, "Noise that changes during a
//! run"): a source with correlation time `τ` is constant on the windows `[kτ, (k+1)τ)` from
//! t = 0 and drawn independently in each, so every (instance, window) pair is a source of its
//! own. This file holds the three numbers the bounds need per source and time, each in closed
//! form (O(1) per source, however many windows lie in `[0, t]`):
//!
//! - the window lengths inside `[0, t]`: `full` windows of length `τ`, then one of length
//!   `last ∈ (0, τ]` ([`split`]);
//! - the *fluctuation sensitivity* `q = √(max Σ_w x_w²)` over the per-window sensitivities
//!   `x_w ≤ s_O ℓ_w` with `Σ_w x_w ≤ e` ([`fluctuation_sensitivity`]), which takes the place of
//!   `e` in every sum of squares (routes G, D, mixed, the Efron–Stein variance);
//! - the bias factor `Σ_w ln φ(2 δ ℓ_w)` ([`ln_phi`]), the logarithm of the source's share of
//!   the product formula.
//!
//! A source with `τ ≥ t` has one window, `[0, t]`: every function then returns the static
//! value itself, bit for bit (the same expression is evaluated), so records whose correlation
//! times exceed the run's last time give exactly the certificate of static noise.

use super::family;
use crate::model::noise::Family;

/// The windows of correlation time `tau` inside `[0, t]`: `Some((full, last))` with `full ≥ 1`
/// windows of length `tau` and a last one of length `last ∈ (0, tau]`, or `None` when
/// `tau ≥ t` (one window, the static case).
///
/// `full` is the largest `k` with `k·tau < t` (computed, then corrected by at most one step
/// either way against the floating-point products), and `last = t − full·tau`.
pub fn split(tau: f64, t: f64) -> Option<(u64, f64)> {
    if !(tau > 0.0 && tau < t) {
        return None;
    }
    let mut k = (t / tau).floor();
    if !k.is_finite() || k > 9.0e15 {
        // More windows than a u64 count exactly: no such run is plausible; fall back to the
        // static value (valid: every window bound is at most the static one).
        return None;
    }
    while k > 0.0 && k * tau >= t {
        k -= 1.0;
    }
    while (k + 1.0) * tau < t {
        k += 1.0;
    }
    let last = t - k * tau;
    Some((k as u64, last.min(tau)))
}

/// `(τ, full, last)` of [`split`] when `tau` is given and below `t`.
fn windows_of(tau: Option<f64>, t: f64) -> Option<(f64, u64, f64)> {
    let tau = tau?;
    split(tau, t).map(|(full, last)| (tau, full, last))
}

/// `√(Σ_w ℓ_w²)` for the windows of `tau` in `[0, t]` (`t` itself when `tau ≥ t`): the
/// effective time of the sums of squares in the global statement and the fidelity bound.
pub fn quadratic_time(tau: Option<f64>, t: f64) -> f64 {
    match windows_of(tau, t) {
        None => t,
        Some((tau, full, last)) => (full as f64 * tau * tau + last * last).sqrt(),
    }
}

/// The fluctuation sensitivity of a source with linear sensitivity `e` (a bound on
/// `Σ_w |∂f/∂g_w|/δ`), at time `t`: the largest `√(Σ_w x_w²)` over `0 ≤ x_w ≤ s_O ℓ_w`,
/// `Σ_w x_w ≤ e` (docs/method.md §3, "Windows"). The caps sorted from the largest are `full`
/// times `s_O τ`, then `s_O·last`; the greedy filling in that order majorizes every feasible
/// vector, and `Σ x²` is Schur-convex, so it gives the maximum. `e` itself when `tau` is
/// `None` or `≥ t`.
pub fn fluctuation_sensitivity(e: f64, s_o: f64, tau: Option<f64>, t: f64) -> f64 {
    let Some((tau, full, last)) = windows_of(tau, t) else {
        return e;
    };
    if !(e > 0.0 && e.is_finite()) {
        return e;
    }
    let cap = s_o * tau;
    if cap.is_nan() || cap <= 0.0 {
        return e;
    }
    let n = (e / cap).floor().min(full as f64);
    let rest = (e - n * cap).max(0.0);
    let extra = if n < full as f64 {
        rest.min(cap)
    } else {
        rest.min(s_o * last)
    };
    // Rounding: the quotient and the products err by an ulp or two; the result is within a
    // few ulp of the exact maximum, as every other sum of the bounds (global.rs header).
    (n * cap * cap + extra * extra).sqrt().min(e)
}

/// `Σ_w ln φ(2 δ ℓ_w)` over the windows of `tau` in `[0, t]`: `full·ln φ(2δτ) + ln φ(2δ·last)`,
/// or `ln φ(2δt)` (the static value) when `tau` is `None` or `≥ t`. 0 for `δ t = 0`.
pub fn ln_phi(f: &Family, delta: f64, tau: Option<f64>, t: f64) -> f64 {
    let at = |len: f64| {
        let y = 2.0 * len * delta;
        if y > 0.0 {
            family::ln_phi(f, y)
        } else {
            0.0
        }
    };
    match windows_of(tau, t) {
        None => at(t),
        Some((tau, full, last)) => full as f64 * at(tau) + at(last),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn windows_partition_the_interval() {
        assert_eq!(split(1.0, 1.0), None);
        assert_eq!(split(2.0, 1.0), None);
        assert_eq!(split(0.25, 1.0), Some((3, 0.25)));
        let (full, last) = split(0.3, 1.0).unwrap();
        assert_eq!(full, 3);
        assert!((last - 0.1).abs() < 1e-15);
        // A time just above a multiple of τ: a sliver of a last window.
        let (full, last) = split(0.5, 1.0 + 1e-12).unwrap();
        assert_eq!(full, 2);
        assert!(last > 0.0 && last < 1e-11);
        for (tau, t) in [(0.1, 1.0), (0.7, 5.3), (1e-3, 2.0)] {
            let (full, last) = split(tau, t).unwrap();
            assert!(last > 0.0 && last <= tau);
            assert!(((full as f64) * tau + last - t).abs() <= 4.0 * f64::EPSILON * t);
        }
    }

    #[test]
    fn static_values_are_returned_bit_for_bit() {
        let f = Family::Uniform;
        for t in [0.0, 0.5, 1.0] {
            assert_eq!(
                ln_phi(&f, 0.3, Some(1.0), t).to_bits(),
                ln_phi(&f, 0.3, None, t).to_bits()
            );
            assert_eq!(fluctuation_sensitivity(0.7, 2.0, Some(1.0), t), 0.7);
            assert_eq!(quadratic_time(Some(1.0), t), t);
        }
    }

    /// The greedy value against a brute-force maximum over the vertices of the polytope
    /// (every coordinate at 0 or its cap, at most one in between), on random cases.
    #[test]
    fn greedy_is_the_maximum_of_the_sum_of_squares() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand::rngs::StdRng::seed_from_u64(14);
        for _ in 0..500 {
            let tau: f64 = rng.random_range(0.05..1.0);
            let t: f64 = rng.random_range(tau * 1.01..tau * 7.0);
            let s_o = 2.0;
            let e: f64 = rng.random_range(0.0..s_o * t * 1.2);
            let (full, last) = split(tau, t).unwrap();
            let mut caps = vec![s_o * tau; full as usize];
            caps.push(s_o * last);
            // Brute force: over subsets at their caps (≤ 8 windows here) plus one partial.
            let n = caps.len();
            assert!(n <= 8);
            let mut best = 0.0f64;
            for mask in 0u32..(1 << n) {
                let used: f64 = (0..n).filter(|i| mask >> i & 1 == 1).map(|i| caps[i]).sum();
                if used > e {
                    continue;
                }
                let sq: f64 = (0..n)
                    .filter(|i| mask >> i & 1 == 1)
                    .map(|i| caps[i] * caps[i])
                    .sum();
                for j in (0..n).filter(|j| mask >> j & 1 == 0) {
                    let x = (e - used).min(caps[j]);
                    best = best.max(sq + x * x);
                }
                best = best.max(sq);
            }
            let q = fluctuation_sensitivity(e, s_o, Some(tau), t);
            assert!(
                q * q >= best * (1.0 - 1e-12),
                "tau {tau} t {t} e {e}: {} < {best}",
                q * q
            );
            assert!(q * q <= best * (1.0 + 1e-12) + 1e-300);
        }
    }

    #[test]
    fn global_fluctuation_sensitivity_is_the_quadratic_time() {
        for (tau, t) in [(0.1, 1.0), (0.3, 1.0), (0.7, 5.3)] {
            let q = fluctuation_sensitivity(2.0 * t, 2.0, Some(tau), t);
            let exact = 2.0 * quadratic_time(Some(tau), t);
            assert!((q - exact).abs() <= 1e-14 * exact, "{q} {exact}");
        }
    }

    /// The product formula is a product over windows: for the uniform family
    /// `Π_w sinh(2δℓ_w)/(2δℓ_w)` (docs/method.md §2 table).
    #[test]
    fn ln_phi_is_the_product_over_windows() {
        let (delta, tau, t) = (0.2, 0.3, 1.0);
        let y = |l: f64| 2.0 * delta * l;
        let direct = 3.0 * (y(tau).sinh() / y(tau)).ln() + (y(0.1).sinh() / y(0.1)).ln();
        let v = ln_phi(&Family::Uniform, delta, Some(tau), t);
        assert!((v - direct).abs() < 1e-12 * direct, "{v} {direct}");
    }

    /// The limits of docs/method.md §3 ("Windows"): for τ → 0 the global fluctuation term of
    /// the averaged trace grows like `t^{1/2}` (fitted exponent 0.5 ± 0.05), the static one
    /// like `t` (1 ± 0.05); 1000 uniform and 1000 two-point sources, t from 0.2 to 1.
    #[test]
    fn fast_noise_makes_the_global_fluctuation_grow_like_the_square_root_of_time() {
        use crate::bounds::global::{evaluate_point, PointInputs, ShotData, SourceData};
        use crate::model::noise::Redrawn;
        let make = |window: Option<f64>| -> Vec<SourceData> {
            (0..2000)
                .map(|i| {
                    let family = if i % 2 == 0 {
                        Family::Uniform
                    } else {
                        Family::TwoPoint
                    };
                    SourceData {
                        family,
                        constants: family::constants(&family),
                        delta: 1e-3,
                        systematic: 0.0,
                        window,
                    }
                })
                .collect()
        };
        let slope = |sources: &[SourceData]| {
            let pts: Vec<(f64, f64)> = (0..9)
                .map(|j| 0.2 + 0.1 * j as f64)
                .map(|t| {
                    let b = evaluate_point(&PointInputs {
                        s_o: 2.0,
                        t,
                        sources,
                        sensitivities: None,
                        redrawn: Redrawn::EveryRealization,
                        realizations: 10,
                        shots: ShotData::Counts(&[]),
                        p: 0.01,
                        alpha: 0.01,
                        p_single: 0.01,
                    });
                    (t.ln(), b.fluctuation.ln())
                })
                .collect();
            let n = pts.len() as f64;
            let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
            let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
            let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
            let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
            sxy / sxx
        };
        let s0 = slope(&make(None));
        let s1 = slope(&make(Some(1e-4)));
        assert!((s0 - 1.0).abs() < 0.05, "static exponent {s0}");
        assert!((s1 - 0.5).abs() < 0.05, "windowed exponent {s1}");
    }

    /// Against the committed SciPy fixture (tests/reference/windows/make_fixtures.py, SciPy
    /// 1.17.1 quadrature): one site, H = 0, |+⟩, noise `δ g(s) Z` drawn again every τ, O = X
    /// (s_O = 2). The bound `(s_O/2)(Π_w φ(2δℓ_w) − 1)` is never below the exact bias
    /// `1 − Π_w E cos(2δ g ℓ_w)`; both agree with the second-order Dyson term
    /// `2δ²σ² ∫∫ C` (double quadrature of the window covariance) to its order; and the closed
    /// form `Σ_w ℓ_w²` equals the double integral.
    #[test]
    fn the_bias_product_formula_against_scipy_quadrature() {
        let text = include_str!("../../tests/reference/windows/bias.json");
        let v: serde_json::Value = serde_json::from_str(text).unwrap();
        let cases = v["cases"].as_array().unwrap();
        assert!(cases.len() >= 50);
        for c in cases {
            let f = match c["family"].as_str().unwrap() {
                "uniform" => Family::Uniform,
                _ => Family::TwoPoint,
            };
            let num = |k: &str| c[k].as_f64().unwrap();
            let (delta, tau, t) = (num("delta"), num("tau"), num("t"));
            let exact = num("exact_bias");
            let second = num("second_order");
            let bound = ln_phi(&f, delta, Some(tau), t).exp_m1();
            assert!(
                bound >= exact * (1.0 - 1e-12),
                "{c}: bound {bound} below the exact bias"
            );
            // Σ ℓ² in closed form against the double integral.
            let q = quadratic_time(Some(tau), t);
            assert!((q * q - num("sum_of_squared_lengths")).abs() < 1e-10, "{c}");
            // Second order: bound and exact both equal 2δ²σ²Σℓ² up to O((δt)⁴).
            let y = 2.0 * delta * t;
            if y < 0.01 {
                assert!(
                    (bound / second - 1.0).abs() < 1e-4,
                    "{c}: {bound} vs {second}"
                );
                assert!(
                    (exact / second - 1.0).abs() < 1e-4,
                    "{c}: {exact} vs {second}"
                );
            }
        }
    }
}
