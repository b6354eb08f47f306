//! The distribution-free confidence bounds on a standard deviation of Maurer and Pontil
//! (2009, "Empirical Bernstein bounds and sample variance penalization", COLT, Theorem 10).
//!
//! For `n ≥ 2` independent variables with values in `[0, 1]`, sample variance `V_n` (the
//! unbiased one) and `E_n = E V_n`, and `δ > 0`:
//!
//! * `P( √E_n > √V_n + √(2 ln(1/δ)/(n − 1)) ) ≤ δ`, and
//! * `P( √V_n > √E_n + √(2 ln(1/δ)/(n − 1)) ) ≤ δ`.
//!
//! (The statement is written here as recalled from the paper; the coverage test below checks
//! the consequence used by quassay by simulation.) For values in a range of width `w` every
//! standard deviation scales by `w`. With a common mean, `E_n` is the average variance, so the
//! second inequality gives a one-sided test of "the variance is at most V" that needs no
//! normality: its p-value is `exp(−(n − 1)(max(0, s − √V)/w)²/2)`, and it gives the lower
//! confidence bound `s − w√(2 ln(1/δ)/(n − 1))` on the standard deviation.

/// `w √(2 ln(1/δ)/(n − 1))`, the radius at failure probability `delta` (`n ≥ 2`).
pub fn radius(width: f64, n: usize, delta: f64) -> f64 {
    width * (2.0 * (1.0 / delta).ln() / (n as f64 - 1.0)).sqrt()
}

/// Lower confidence bound, at failure probability `delta`, on the standard deviation of `n`
/// independent values in a range of width `width` with sample standard deviation `s`
/// (never below 0).
pub fn std_lower_bound(s: f64, n: usize, width: f64, delta: f64) -> f64 {
    (s - radius(width, n, delta)).max(0.0)
}

/// Upper confidence bound on the standard deviation (the first inequality).
pub fn std_upper_bound(s: f64, n: usize, width: f64, delta: f64) -> f64 {
    s + radius(width, n, delta)
}

/// p-value of `H0: average variance ≤ allowed` from the sample standard deviation `s` of `n`
/// values in a range of width `width`: `exp(−(n − 1)(max(0, s − √allowed)/width)²/2)`.
///
/// A zero width (all values equal by definition) gives 1 when `s = 0`.
pub fn excess_p_value(s: f64, allowed: f64, n: usize, width: f64) -> f64 {
    let excess = (s - allowed.max(0.0).sqrt()).max(0.0);
    if excess == 0.0 {
        return 1.0;
    }
    if width <= 0.0 {
        return 0.0;
    }
    let u = excess / width;
    (-0.5 * (n as f64 - 1.0) * u * u).exp()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::checks::variance::mean_and_variance;
    use rand::{Rng, SeedableRng};

    /// Smallest k with P(Bin(n, p) ≥ k) ≤ level (exact pmf, summed in log space).
    fn binomial_critical(n: u64, p: f64, level: f64) -> u64 {
        use statrs::function::gamma::ln_gamma;
        let ln_pmf = |k: u64| {
            ln_gamma(n as f64 + 1.0) - ln_gamma(k as f64 + 1.0) - ln_gamma((n - k) as f64 + 1.0)
                + k as f64 * p.ln()
                + (n - k) as f64 * (1.0 - p).ln()
        };
        let mut tail = 0.0;
        for k in (0..=n).rev() {
            tail += ln_pmf(k).exp();
            if tail > level {
                return k + 1;
            }
        }
        0
    }

    /// A bounded law to draw from.
    type Law<'a> = &'a dyn Fn(&mut rand_chacha::ChaCha20Rng) -> f64;

    /// Counts, over `trials` samples of `n` values, how often the lower bound (computed with
    /// the radius multiplied by `shrink`) exceeds the true σ.
    fn exceedances(
        draw: Law,
        sigma: f64,
        n: usize,
        delta: f64,
        shrink: f64,
        trials: u64,
        seed: u64,
    ) -> u64 {
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(seed);
        let mut values = vec![0.0; n];
        let mut count = 0;
        for _ in 0..trials {
            for v in values.iter_mut() {
                *v = draw(&mut rng);
            }
            let (_, var) = mean_and_variance(&values).unwrap();
            let lower = (var.sqrt() - shrink * radius(1.0, n, delta)).max(0.0);
            count += u64::from(lower > sigma);
        }
        count
    }

    /// Coverage by simulation: for bounded laws with known σ (a Bernoulli(0.05) on {0, 1}, the
    /// most skewed case tried, and the uniform law on [0, 1] with σ = 1/√12), the lower bound
    /// exceeds σ in at most the allowed fraction δ of the trials, by a one-sided binomial test
    /// at level 0.001. The same test rejects a radius shrunk to a tenth, so it has power.
    #[test]
    fn the_lower_bound_covers_sigma_in_simulation() {
        let trials = 20_000;
        let bern =
            |rng: &mut rand_chacha::ChaCha20Rng| f64::from(u8::from(rng.random::<f64>() < 0.05));
        let unif = |rng: &mut rand_chacha::ChaCha20Rng| rng.random::<f64>();
        let cases: [(Law, f64); 2] = [
            (&bern, (0.05f64 * 0.95).sqrt()),
            (&unif, 1.0 / 12f64.sqrt()),
        ];
        for (law, sigma) in cases {
            for &(n, delta) in &[(10usize, 0.5), (40, 0.2), (40, 0.9)] {
                let k = binomial_critical(trials, delta, 0.001);
                let c = exceedances(law, sigma, n, delta, 1.0, trials, 2009 + n as u64);
                assert!(
                    c < k,
                    "n={n} δ={delta}: {c} exceedances, allowance below {k}"
                );
            }
        }
        // With a tenth of the radius, n = 10, δ = 0.2: one success in ten already puts the
        // bound above σ, which happens with probability 1 − 0.95¹⁰ ≈ 0.40 > 0.2.
        let k = binomial_critical(trials, 0.2, 0.001);
        let c = exceedances(&bern, (0.05f64 * 0.95).sqrt(), 10, 0.2, 0.1, trials, 7);
        assert!(c >= k, "a tenth of the radius should undercover: {c} < {k}");
    }

    #[test]
    fn p_value_and_bounds_have_their_closed_forms() {
        // s = 0.5, allowed variance 0.09 (sd 0.3), width 2, n = 11: exp(−10·0.01/2).
        let p = excess_p_value(0.5, 0.09, 11, 2.0);
        assert!((p - (-0.05f64).exp()).abs() < 1e-15);
        assert_eq!(excess_p_value(0.2, 0.09, 11, 2.0), 1.0);
        // The p-value is the δ at which the lower bound just reaches the allowed sd.
        let lower = std_lower_bound(0.5, 11, 2.0, p);
        assert!((lower - 0.3).abs() < 1e-14);
        assert!(std_upper_bound(0.5, 11, 2.0, p) > 0.5);
        assert_eq!(std_lower_bound(0.01, 3, 1.0, 0.01), 0.0);
    }
}
