//! The exact (Clopper–Pearson 1934) confidence interval for a binomial success probability.
//!
//! Exists for the noise-drawn-once case with R = 1: a value that is the mean of
//! ±1 outcomes with a known shot count is `2k/n − 1` for `k` successes in `n` trials.
//! Lower end: the `p` with `P(X ≥ k; p) = α/2` (0 if k = 0); upper end: the `p` with
//! `P(X ≤ k; p) = α/2` (1 if k = n), i.e. `1 − lower(n − k, n)`.
//!
//! Computed rigorously rather than through `statrs::function::beta::beta_reg`, which (statrs
//! 0.18) stops its continued fraction after 140 terms without saying so (too few for n ≳ 10⁴)
//! and forms its prefactor from `ln Γ` values of size ~n ln n, losing ~n ln n · u relatively.
//! Here the tail `I_p(k, n − k + 1)` is the binomial pmf (Loader's saddle-point form,
//! relative error of a few tens of u for every n) times the incomplete-beta continued fraction
//! (modified Lentz, run to convergence), and the search is a bisection on the bit patterns of
//! `p ∈ [0, 1]` that keeps only points whose tail is *verified* ≤ α/2 after an error margin.

use statrs::function::gamma::ln_gamma;

use super::U;

/// Exact binomial interval for a success probability from `k` successes in `n` trials, failure
/// probability `alpha` (two-sided, `alpha/2` each side), rounded outward, within [0, 1].
/// `n = 0`, `k > n` or `alpha` outside (0, 1) give [0, 1].
pub fn clopper_pearson(k: u64, n: u64, alpha: f64) -> [f64; 2] {
    if n == 0 || k > n || alpha.is_nan() || alpha <= 0.0 || alpha >= 1.0 {
        return [0.0, 1.0];
    }
    let a = alpha / 2.0;
    let lo = lower(k, n, a);
    let q = lower(n - k, n, a);
    // 1 − q rounded up (the exact difference may lie one rounding below fl(1 − q)).
    let hi = if q == 0.0 {
        1.0
    } else {
        // One ulp up (1 − q > 0 here, so the bit pattern steps up in value; MSRV 1.85 has no
        // `next_up`).
        f64::from_bits((1.0 - q).to_bits() + 1).min(1.0)
    };
    [lo, hi]
}

/// Largest `p` (a verified point) with `P(X ≥ k; p) ≤ a` for `X ~ Bin(n, p)`; 0 if k = 0.
fn lower(k: u64, n: u64, a: f64) -> f64 {
    if k == 0 {
        return 0.0;
    }
    // Bisection on the bit patterns of non-negative floats (monotone in the value): at most
    // 62 steps to adjacent floats. Invariant: `bits(r)` verified, `bits(q)` not.
    let mut r: u64 = 0; // p = 0: the tail is 0.
    let mut q: u64 = 1.0f64.to_bits(); // p = 1: the tail is 1 > a.
    while q - r > 1 {
        let mid = r + (q - r) / 2;
        let p = f64::from_bits(mid);
        match tail_upper(k, n, p) {
            Some(t) if t <= a => r = mid,
            _ => q = mid,
        }
    }
    f64::from_bits(r)
}

/// An upper bound on `P(X ≥ k; p) = I_p(k, n − k + 1)` for `1 ≤ k ≤ n`, `0 < p < 1`, or `None`
/// when the continued fraction did not converge (the caller then treats `p` as unverified).
fn tail_upper(k: u64, n: u64, p: f64) -> Option<f64> {
    let (kf, nf) = (k as f64, n as f64);
    let (a, b) = (kf, nf - kf + 1.0);
    // pmf·(1 − p) = p^a (1 − p)^b / (a B(a, b)).
    let (pmf, pmf_err) = dbinom(k, n, p);
    let pref = pmf * (1.0 - p);
    if p < (a + 1.0) / (a + b + 2.0) {
        let (cf, iters) = beta_cf(a, b, p)?;
        let val = pref * cf;
        let rel = pmf_err + 8.0 * U * (iters as f64 + 4.0);
        Some(val * (1.0 + 2.0 * rel) + f64::MIN_POSITIVE)
    } else {
        // I_p(a, b) = 1 − I_{1−p}(b, a), I_{1−p}(b, a) = pref·cf/b · (a/a): same prefactor.
        let (cf, iters) = beta_cf(b, a, 1.0 - p)?;
        let comp = pref * cf * (a / b);
        let rel = pmf_err + 8.0 * U * (iters as f64 + 4.0);
        Some(1.0 - comp * (1.0 - 2.0 * rel) + 4.0 * U)
    }
}

/// The continued fraction of `I_x(a, b) = x^a(1−x)^b/(a B(a,b)) · cf` (modified Lentz, the
/// even/odd form for `x < (a+1)/(a+b+2)`), with the number of terms used; `None` if not
/// converged within 10⁶ terms (it needs O(√max(a, b)) terms).
fn beta_cf(a: f64, b: f64, x: f64) -> Option<(f64, u64)> {
    let tiny = 1e-300;
    let (qab, qap, qam) = (a + b, a + 1.0, a - 1.0);
    let mut c = 1.0;
    let mut d = 1.0 - qab * x / qap;
    if d.abs() < tiny {
        d = tiny;
    }
    d = 1.0 / d;
    let mut h = d;
    // One Lentz update with coefficient `aa`: returns the factor `d·c` that multiplies `h`.
    let mut lentz = |aa: f64| {
        d = 1.0 + aa * d;
        if d.abs() < tiny {
            d = tiny;
        }
        c = 1.0 + aa / c;
        if c.abs() < tiny {
            c = tiny;
        }
        d = 1.0 / d;
        d * c
    };
    for m in 1..1_000_000u64 {
        let mf = m as f64;
        let m2 = 2.0 * mf;
        h *= lentz(mf * (b - mf) * x / ((qam + m2) * (a + m2)));
        let del = lentz(-(a + mf) * (qab + mf) * x / ((a + m2) * (qap + m2)));
        h *= del;
        if (del - 1.0).abs() <= 2.0 * U {
            return Some((h, m));
        }
    }
    None
}

/// The binomial pmf `C(n, k) p^k (1−p)^(n−k)` for `1 ≤ k ≤ n`, `0 < p < 1`, with a bound on its
/// relative error. Loader's form (C. Loader, "Fast and accurate computation of binomial
/// probabilities", 2000, citation from memory; the method of R's `dbinom`):
/// `exp(S(n) − S(k) − S(n−k) − bd0(k, np) − bd0(n−k, n(1−p))) · sqrt(n / (2π k (n−k)))`,
/// with `S` the Stirling remainder and `bd0(x, M) = x ln(x/M) + M − x` summed as a series when
/// `x ≈ M`, so that no large terms cancel.
pub(crate) fn dbinom(k: u64, n: u64, p: f64) -> (f64, f64) {
    let (kf, nf) = (k as f64, n as f64);
    if k == n {
        // p^n: ln p has relative error u, times n.
        let e = nf * p.ln();
        return (e.exp(), (e.abs() + 2.0) * 4.0 * U);
    }
    let nk = nf - kf;
    let (s_n, e_n) = stirlerr(n);
    let (s_k, e_k) = stirlerr(k);
    let (s_nk, e_nk) = stirlerr(n - k);
    let b1 = bd0(kf, nf * p);
    let b2 = bd0(nk, nf * (1.0 - p));
    let expo = s_n - s_k - s_nk - b1 - b2;
    let root = (nf / (2.0 * std::f64::consts::PI * kf * nk)).sqrt();
    // Errors: the Stirling terms' own bounds; bd0 to ~8u relative each (series or direct, the
    // direct branch only when the terms do not nearly cancel), plus the rounding of M = np
    // (relative u, moving bd0 by ≤ u|M − x|, below u·(|b| + x)); exp and the root ~4u.
    let err = e_n
        + e_k
        + e_nk
        + 16.0 * U * (b1.abs() + b2.abs() + kf.min(nk) + 1.0)
        + 8.0 * U * (expo.abs() + 1.0);
    (expo.exp() * root, err)
}

/// Stirling remainder `S(n) = ln n! − (n + ½) ln n + n − ½ ln 2π` and an absolute error bound.
/// For n > 30 the asymptotic series to the n⁻⁹ term (truncation error < 1/(1188 n¹¹) with the
/// next coefficient, i.e. < 1e-19); for 1 ≤ n ≤ 30 from `ln Γ` (statrs 0.18, Lanczos; its
/// accuracy taken as 1e-14 relative on `ln Γ(n + 1) ≤ 75`, a conservative allowance from
/// memory of its documented precision); S(0) is not needed (k, n − k ≥ 1 here).
fn stirlerr(n: u64) -> (f64, f64) {
    let x = n as f64;
    if n > 30 {
        let x2 = x * x;
        let s = (1.0 / 12.0
            - (1.0 / 360.0 - (1.0 / 1260.0 - (1.0 / 1680.0 - 1.0 / (1188.0 * x2)) / x2) / x2) / x2)
            / x;
        (s, 1e-19 + 4.0 * U * s.abs())
    } else {
        let lg = ln_gamma(x + 1.0);
        let s = lg - (x + 0.5) * x.ln() + x - 0.5 * (2.0 * std::f64::consts::PI).ln();
        (
            s,
            1e-14 * (lg.abs() + 1.0) + 8.0 * U * ((x + 0.5) * x.ln() + x + 1.0),
        )
    }
}

/// `x ln(x/M) + M − x` without cancellation (Loader's `bd0`).
fn bd0(x: f64, m: f64) -> f64 {
    if (x - m).abs() < 0.1 * (x + m) {
        let v = (x - m) / (x + m);
        let mut s = (x - m) * v;
        let mut ej = 2.0 * x * v;
        let v2 = v * v;
        for j in 1..1000 {
            ej *= v2;
            let s1 = s + ej / (2 * j + 1) as f64;
            if s1 == s {
                return s1;
            }
            s = s1;
        }
        s
    } else {
        x * (x / m).ln() + m - x
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against `tests/reference/data_interval/clopper_pearson.json`: SciPy 1.17.1
    /// `binomtest(k, n).proportion_ci(confidence_level=1−α, method='exact')` and, where it
    /// converged, mpmath 1.3.0 50-digit roots of the binomial tails (`ci_mpmath`). SciPy's Beta
    /// quantiles are off by up to 5e-6 relative in far tails (k = 1, n = 20, α = 1e-6: SciPy
    /// 2.5000119e-8, mpmath and the closed form 1 − (1 − α/2)^(1/20) = 2.5000006e-8), so the
    /// 1e-9-relative, never-narrower check is against mpmath where present, against SciPy
    /// otherwise (there: never narrower by more than 1e-12).
    #[test]
    fn matches_scipy_and_mpmath_exact_interval() {
        let text = include_str!("../../../tests/reference/data_interval/clopper_pearson.json");
        let v: serde_json::Value = serde_json::from_str(text).unwrap();
        let cases = v["cases"].as_array().unwrap();
        assert!(cases.len() >= 30);
        let rel = |x: f64, y: f64| (x - y).abs() <= 1e-9 * y.abs().max(x.abs()) + 1e-300;
        let mut with_mpmath = 0;
        for c in cases {
            let k = c["k"].as_u64().unwrap();
            let n = c["n"].as_u64().unwrap();
            let alpha = c["alpha"].as_f64().unwrap();
            let [l, u] = clopper_pearson(k, n, alpha);
            if let Some(m) = c["ci_mpmath"].as_array() {
                with_mpmath += 1;
                let (el, eu) = (m[0].as_f64().unwrap(), m[1].as_f64().unwrap());
                assert!(
                    rel(l, el) && l <= el,
                    "k={k} n={n} α={alpha}: {l} vs mpmath {el}"
                );
                assert!(
                    rel(u, eu) && u >= eu,
                    "k={k} n={n} α={alpha}: {u} vs mpmath {eu}"
                );
            } else {
                let el = c["ci"][0].as_f64().unwrap();
                let eu = c["ci"][1].as_f64().unwrap();
                assert!(
                    rel(l, el) && l <= el + 1e-12,
                    "k={k} n={n} α={alpha}: {l} vs {el}"
                );
                assert!(
                    rel(u, eu) && u >= eu - 1e-12,
                    "k={k} n={n} α={alpha}: {u} vs {eu}"
                );
            }
        }
        assert!(with_mpmath >= 30);
    }

    #[test]
    fn edge_cases() {
        assert_eq!(clopper_pearson(0, 0, 0.05), [0.0, 1.0]);
        assert_eq!(clopper_pearson(3, 2, 0.05), [0.0, 1.0]);
        // k = 0: upper end 1 − (α/2)^(1/n) (closed form).
        let [l, u] = clopper_pearson(0, 10, 0.05);
        assert_eq!(l, 0.0);
        let exact = 1.0 - 0.025f64.powf(0.1);
        assert!(u >= exact && u - exact < 1e-14, "{u} vs {exact}");
    }
}
