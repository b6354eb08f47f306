//! Random streams, noise draws and shot sampling, with samplers of our own.
//!
//! Every random number comes from `rand_chacha::ChaCha20Rng::seed_from_u64(seed)` with
//! `set_stream(k)`: stream 0 is the single draw of a record redrawn `once`, stream `r + 1`
//! belongs to realization `r` (its noise draws, then its shots, in a fixed order). A
//! realization's numbers therefore do not depend on how many threads run or in which order.
//!
//! The samplers are written here, so that no result depends on a crate's sampler changing
//! between versions:
//!
//! * uniform on `[0, 1)`: the top 53 bits of one `u64`, times `2^−53`;
//! * standard normal: Marsaglia's polar method (the second value of each pair is discarded,
//!   so a draw is a function of the stream position only);
//! * truncated normal: rejection from the normal when `cutoff ≥ sigma` (acceptance ≥ 68 %),
//!   otherwise from the uniform on `[−cutoff, cutoff]` with acceptance `exp(−x²/2σ²)` (≥ 60 %);
//!   both exact;
//! * bounded (a record only promises zero mean, support and a std bound): the law
//!   documented in docs/simulator.md, a zero-mean mixture of the two end points with 0;
//! * binomial: a sum of Bernoulli trials for `n ≤ 1024`; above, Knuth's exact splitting by a
//!   Beta-distributed order statistic (TAOCP vol. 2, §3.4.1 F) until `n ≤ 1024`, with Gamma
//!   variates by Marsaglia and Tsang (2000);
//! * flip patterns of a preparation error: the number of shots with each pattern, by
//!   splitting the shots site by site with binomial draws (exact, see
//!   [`flip_pattern_counts`]).

use std::collections::BTreeMap;

use num_complex::Complex64;
use rand_chacha::rand_core::{RngCore, SeedableRng};
use rand_chacha::ChaCha20Rng;

use crate::model::Family;

/// The stream for the `once` draw.
pub const ONCE_STREAM: u64 = 0;

/// The random stream `index` of `seed`.
pub fn stream(seed: u64, index: u64) -> ChaCha20Rng {
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    rng.set_stream(index);
    rng
}

/// The stream of realization `r`.
pub fn realization_stream(seed: u64, r: usize) -> ChaCha20Rng {
    stream(seed, r as u64 + 1)
}

/// Uniform on `[0, 1)`.
pub fn uniform01(rng: &mut impl RngCore) -> f64 {
    (rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// Standard normal by the polar method.
pub fn standard_normal(rng: &mut impl RngCore) -> f64 {
    loop {
        let u = 2.0 * uniform01(rng) - 1.0;
        let v = 2.0 * uniform01(rng) - 1.0;
        let s = u * u + v * v;
        if s > 0.0 && s < 1.0 {
            return u * (-2.0 * s.ln() / s).sqrt();
        }
    }
}

/// The concrete law used for a `bounded` family: `(b, q)` meaning `g = upper` with
/// probability `q·(−lower)/(upper − lower)`, `g = lower` with probability
/// `q·upper/(upper − lower)`, else 0 (zero mean, variance `q·(−lower·upper)`). For a symmetric
/// family the end points are `±b` with `b = min(−lower, upper)`.
fn bounded_law(lower: f64, upper: f64, std: f64, symmetric: bool) -> (f64, f64, f64) {
    let (lo, hi) = if symmetric {
        let b = (-lower).min(upper).max(0.0);
        (-b, b)
    } else {
        (lower.min(0.0), upper.max(0.0))
    };
    let full = -lo * hi;
    let q = if full > 0.0 {
        (std * std / full).min(1.0)
    } else {
        0.0
    };
    (lo, hi, q)
}

/// The variance of the law [`draw`] uses for `family` (exact for every family).
pub fn simulated_variance(family: &Family) -> f64 {
    match *family {
        Family::Uniform => 1.0 / 3.0,
        Family::Normal { sigma } => sigma * sigma,
        Family::TruncatedNormal { sigma, cutoff } => truncated_normal_variance(sigma, cutoff),
        Family::TwoPoint => 1.0,
        Family::Bounded {
            lower,
            upper,
            std,
            symmetric,
        } => {
            let (lo, hi, q) = bounded_law(lower, upper, std, symmetric);
            q * (-lo * hi)
        }
    }
}

/// `Var(X)` for `X ~ N(0, σ²)` conditioned on `|X| ≤ c`: `σ²(1 − 2aφ(a)/(2Φ(a) − 1))`, `a = c/σ`.
pub fn truncated_normal_variance(sigma: f64, cutoff: f64) -> f64 {
    let a = cutoff / sigma;
    let pdf = (-0.5 * a * a).exp() / (2.0 * std::f64::consts::PI).sqrt();
    let mass = statrs::function::erf::erf(a / std::f64::consts::SQRT_2);
    sigma * sigma * (1.0 - 2.0 * a * pdf / mass)
}

/// One draw of `g` from `family`.
pub fn draw(rng: &mut impl RngCore, family: &Family) -> f64 {
    match *family {
        Family::Uniform => 2.0 * uniform01(rng) - 1.0,
        Family::Normal { sigma } => sigma * standard_normal(rng),
        Family::TruncatedNormal { sigma, cutoff } => {
            if cutoff >= sigma {
                loop {
                    let x = sigma * standard_normal(rng);
                    if x.abs() <= cutoff {
                        return x;
                    }
                }
            } else {
                loop {
                    let x = cutoff * (2.0 * uniform01(rng) - 1.0);
                    if uniform01(rng) < (-0.5 * (x / sigma) * (x / sigma)).exp() {
                        return x;
                    }
                }
            }
        }
        Family::TwoPoint => {
            if rng.next_u64() >> 63 == 1 {
                1.0
            } else {
                -1.0
            }
        }
        Family::Bounded {
            lower,
            upper,
            std,
            symmetric,
        } => {
            let (lo, hi, q) = bounded_law(lower, upper, std, symmetric);
            let u = uniform01(rng);
            let p_hi = q * (-lo) / (hi - lo).max(f64::MIN_POSITIVE);
            let p_lo = q * hi / (hi - lo).max(f64::MIN_POSITIVE);
            if u < p_hi {
                hi
            } else if u < p_hi + p_lo {
                lo
            } else {
                0.0
            }
        }
    }
}

/// Gamma(shape, 1) for `shape ≥ 1` (Marsaglia and Tsang, 2000).
pub fn gamma(rng: &mut impl RngCore, shape: f64) -> f64 {
    let d = shape - 1.0 / 3.0;
    let c = 1.0 / (9.0 * d).sqrt();
    loop {
        let x = standard_normal(rng);
        let v = 1.0 + c * x;
        if v <= 0.0 {
            continue;
        }
        let v = v * v * v;
        let u = uniform01(rng);
        if u.ln() < 0.5 * x * x + d - d * v + d * v.ln() {
            return d * v;
        }
    }
}

/// Binomial(n, p), exact (see the module header); `p` is clamped to `[0, 1]`.
pub fn binomial(rng: &mut impl RngCore, n: u64, p: f64) -> u64 {
    let mut p = if p.is_nan() { 0.5 } else { p.clamp(0.0, 1.0) };
    let mut n = n;
    let mut count = 0u64;
    while n > 1024 {
        if p == 0.0 || p == 1.0 {
            break;
        }
        // The a-th smallest of n uniforms is Beta(a, n + 1 − a).
        let a = 1 + n / 2;
        let b = n + 1 - a;
        let ga = gamma(rng, a as f64);
        let gb = gamma(rng, b as f64);
        let x = ga / (ga + gb);
        if x >= p {
            // All successes are among the a − 1 uniforms below x: Binomial(a − 1, p/x).
            n = a - 1;
            p /= x;
        } else {
            // The a uniforms up to x are successes; the rest are above x.
            count += a;
            n = b - 1;
            p = (p - x) / (1.0 - x);
        }
    }
    if p == 0.0 {
        return count;
    }
    if p == 1.0 {
        return count + n;
    }
    for _ in 0..n {
        if uniform01(rng) < p {
            count += 1;
        }
    }
    count
}

/// The mean of `shots` ±1 outcomes of a Pauli product with exact expectation `expectation`:
/// `2·Binomial(S, p)/S − 1`, `p = (1 + ⟨P⟩)/2` clamped to `[0, 1]`.
pub fn pauli_shot_mean(rng: &mut impl RngCore, shots: u64, expectation: f64) -> f64 {
    let k = pauli_plus_count(rng, shots, expectation);
    2.0 * k as f64 / shots as f64 - 1.0
}

/// The number of `+1` outcomes among `shots` shots of a Pauli product with exact expectation
/// `expectation`: `Binomial(S, p)`, `p = (1 + ⟨P⟩)/2` clamped to `[0, 1]`.
pub fn pauli_plus_count(rng: &mut impl RngCore, shots: u64, expectation: f64) -> u64 {
    let p = (0.5 * (1.0 + expectation)).clamp(0.0, 1.0);
    binomial(rng, shots, p)
}

/// Draws `shots` basis states from the probabilities `|ψ_b|²` (cumulative sums in index order,
/// binary search per shot) and returns them in draw order.
pub fn sample_basis_states(rng: &mut impl RngCore, psi: &[Complex64], shots: u64) -> Vec<u64> {
    let weights: Vec<f64> = psi.iter().map(|a| a.norm_sqr()).collect();
    sample_weighted(rng, &weights, shots)
}

/// Draws `shots` indices with probabilities proportional to `weights` (≥ 0; cumulative sums
/// in index order, one uniform and a binary search per shot), in draw order.
pub fn sample_weighted(rng: &mut impl RngCore, weights: &[f64], shots: u64) -> Vec<u64> {
    let mut cdf = Vec::with_capacity(weights.len());
    let mut acc = 0.0f64;
    for &w in weights {
        acc += w;
        cdf.push(acc);
    }
    let total = acc;
    (0..shots)
        .map(|_| {
            let u = uniform01(rng) * total;
            let i = cdf.partition_point(|&c| c <= u);
            i.min(weights.len() - 1) as u64
        })
        .collect()
}

/// How many of `shots` shots have each flip pattern, when each of `n_sites` sites is flipped
/// independently with probability `q` in every shot: a map from the pattern (bit `i` set if
/// site `i` is flipped) to its number of shots, patterns with no shot left out.
///
/// Exact: the counts of the `2^n` patterns are multinomial with the product probabilities, and
/// this draws them by splitting, site by site, every group of shots that agree on the sites
/// before into those that flip the next site (`Binomial(group, q)`) and the others; given the
/// split, each part again has independent sites with probability `q`. The order is fixed:
/// depth first, site 0 first, the unflipped part before the flipped one, empty groups skipped.
/// For `shots = 1` this is one uniform per site (`u < q`), in site order. Cost: about
/// `n · min(shots, 1024 · patterns)` uniforms, whatever the number of shots.
pub fn flip_pattern_counts(
    rng: &mut impl RngCore,
    n_sites: usize,
    shots: u64,
    q: f64,
) -> BTreeMap<u64, u64> {
    let mut out = BTreeMap::new();
    // (first undecided site, pattern so far, shots in the group); popped last-in first-out,
    // so the unflipped part (pushed last) is split first.
    let mut stack = vec![(0usize, 0u64, shots)];
    while let Some((site, mask, count)) = stack.pop() {
        if count == 0 {
            continue;
        }
        if site == n_sites {
            out.insert(mask, count);
            continue;
        }
        let flipped = binomial(rng, count, q);
        stack.push((site + 1, mask | (1u64 << site), flipped));
        stack.push((site + 1, mask, count - flipped));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn moments(xs: &[f64]) -> (f64, f64) {
        let n = xs.len() as f64;
        let m = xs.iter().sum::<f64>() / n;
        let v = xs.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (n - 1.0);
        (m, v)
    }

    fn draws(family: Family, n: usize) -> Vec<f64> {
        let mut rng = stream(12345, 7);
        (0..n).map(|_| draw(&mut rng, &family)).collect()
    }

    // Tolerances: with N = 200 000 draws the standard error of the mean is σ/√N ≈ 0.0022σ and
    // that of the variance about σ²·√(2/N) ≈ 0.0032σ² for a normal law (less for bounded
    // ones); the checks use about 5 standard errors, so a correct sampler fails with
    // probability below 1e-6 and the fixed seed makes the test deterministic anyway.
    const N: usize = 200_000;

    #[test]
    fn uniform_draws_have_mean_zero_and_variance_one_third() {
        // Closed form: U[−1, 1] has mean 0, variance 1/3.
        let (m, v) = moments(&draws(Family::Uniform, N));
        assert!(m.abs() < 0.007, "{m}");
        assert!((v - 1.0 / 3.0).abs() < 0.004, "{v}");
    }

    #[test]
    fn normal_draws_have_the_declared_sigma() {
        let (m, v) = moments(&draws(Family::Normal { sigma: 2.0 }, N));
        assert!(m.abs() < 0.022, "{m}");
        assert!((v - 4.0).abs() < 0.07, "{v}");
    }

    #[test]
    fn truncated_normal_draws_match_scipy_variance() {
        // scipy.stats.truncnorm(-1.5, 1.5).var() = 0.5515244157615512 (SciPy 1.17); with
        // sigma = 2, cutoff = 3 the variance is 4 × that. The tolerance 1e-10 allows for the
        // accuracy of statrs' erf (it differs from libm's by about 5e-12 relative here).
        let tv = truncated_normal_variance(2.0, 3.0);
        assert!((tv - 4.0 * 0.551_524_415_761_551_2).abs() < 1e-10, "{tv}");
        let (m, v) = moments(&draws(
            Family::TruncatedNormal {
                sigma: 2.0,
                cutoff: 3.0,
            },
            N,
        ));
        assert!(m.abs() < 0.02, "{m}");
        assert!((v - 4.0 * 0.551_524_4).abs() < 0.05, "{v}");
        // The uniform-proposal branch (cutoff < sigma): scipy.stats.truncnorm(-0.5, 0.5).var()
        // = 0.08058915460081173 (SciPy 1.17).
        let (m, v) = moments(&draws(
            Family::TruncatedNormal {
                sigma: 1.0,
                cutoff: 0.5,
            },
            N,
        ));
        assert!(m.abs() < 0.003, "{m}");
        assert!(
            (v - truncated_normal_variance(1.0, 0.5)).abs() < 0.002,
            "{v}"
        );
        assert!((truncated_normal_variance(1.0, 0.5) - 0.080_589_154_600_811_73).abs() < 1e-10);
    }

    #[test]
    fn bounded_draws_have_zero_mean_and_the_declared_std() {
        let f = Family::Bounded {
            lower: -0.5,
            upper: 2.0,
            std: 0.6,
            symmetric: false,
        };
        let xs = draws(f, N);
        assert!(xs.iter().all(|&x| (-0.5..=2.0).contains(&x)));
        let (m, v) = moments(&xs);
        assert!(m.abs() < 0.007, "{m}");
        assert!((v - 0.36).abs() < 0.01, "{v}");
        assert!((simulated_variance(&f) - 0.36).abs() < 1e-15);
    }

    #[test]
    fn binomial_means_match_n_p_for_small_and_large_n() {
        // E Binomial(n, p) = n p, Var = n p (1 − p) (closed form). 2000 draws each: the mean
        // of the draws has standard error √(np(1−p)/2000); the check uses 5 of them.
        let mut rng = stream(99, 1);
        for &(n, p) in &[
            (10u64, 0.3),
            (1000, 0.01),
            (100_000, 0.37),
            (10_000_000, 0.5),
        ] {
            let k = 2000;
            let xs: Vec<f64> = (0..k).map(|_| binomial(&mut rng, n, p) as f64).collect();
            let (m, v) = moments(&xs);
            let var = n as f64 * p * (1.0 - p);
            assert!(
                (m - n as f64 * p).abs() < 5.0 * (var / k as f64).sqrt(),
                "{n} {p} {m}"
            );
            assert!((v / var - 1.0).abs() < 0.2, "{n} {p} {v}");
            assert!(xs.iter().all(|&x| x <= n as f64));
        }
        assert_eq!(binomial(&mut rng, 50, 0.0), 0);
        assert_eq!(binomial(&mut rng, 5000, 1.0), 5000);
    }

    #[test]
    fn streams_are_reproducible_and_distinct() {
        let a: Vec<u64> = (0..4).map(|_| stream(5, 3).next_u64()).collect();
        assert!(a.iter().all(|&x| x == a[0]));
        assert_ne!(stream(5, 3).next_u64(), stream(5, 4).next_u64());
    }

    #[test]
    fn basis_sampling_follows_the_probabilities() {
        let s = (0.2f64).sqrt();
        let psi = [
            Complex64::new(s, 0.0),
            Complex64::new(0.0, 0.0),
            Complex64::new(0.0, (0.8f64).sqrt()),
        ];
        let mut rng = stream(1, 1);
        let draws = sample_basis_states(&mut rng, &psi, 20_000);
        assert!(!draws.contains(&1));
        let f0 = draws.iter().filter(|&&b| b == 0).count() as f64 / 20_000.0;
        // Standard error √(0.16/20000) = 0.0028; 5 of them.
        assert!((f0 - 0.2).abs() < 0.015, "{f0}");
    }

    #[test]
    fn flip_patterns_follow_the_product_law() {
        // Two sites, q = 0.3: patterns 00, 01 (site 0 flipped), 10, 11 have the probabilities
        // 0.49, 0.21, 0.21, 0.09 (independent sites, closed form). One draw of S shots: each
        // frequency has standard error √(p(1−p)/S); the checks use 5 of them. S = 10^9 goes
        // through the Beta splitting of the binomial sampler, S = 2·10^5 through Bernoulli sums.
        let probs = [0.49, 0.21, 0.21, 0.09];
        let mut rng = stream(8, 2);
        for shots in [200_000u64, 1_000_000_000] {
            let counts = flip_pattern_counts(&mut rng, 2, shots, 0.3);
            assert_eq!(counts.values().sum::<u64>(), shots);
            for (mask, p) in probs.iter().enumerate() {
                let f = counts.get(&(mask as u64)).copied().unwrap_or(0) as f64 / shots as f64;
                let se = (p * (1.0 - p) / shots as f64).sqrt();
                assert!((f - p).abs() < 5.0 * se, "{shots} {mask} {f}");
            }
        }
        // The joint law of a few shots, not only the frequencies: with S = 3 the chance that
        // all three shots have pattern 00 is 0.49³ = 0.117649. 20 000 repetitions: standard
        // error √(0.1176 · 0.8824 / 20000) = 0.00228; 5 of them.
        let reps = 20_000;
        let all_clean = (0..reps)
            .filter(|_| flip_pattern_counts(&mut rng, 2, 3, 0.3).get(&0) == Some(&3))
            .count() as f64
            / reps as f64;
        assert!((all_clean - 0.117_649).abs() < 0.0114, "{all_clean}");
    }

    #[test]
    fn flip_patterns_at_the_ends_use_no_randomness_and_one_shot_uses_one_uniform_per_site() {
        let mut rng = stream(4, 4);
        assert_eq!(
            flip_pattern_counts(&mut rng, 5, 77, 0.0),
            BTreeMap::from([(0, 77)])
        );
        assert_eq!(
            flip_pattern_counts(&mut rng, 5, 77, 1.0),
            BTreeMap::from([(0b11111, 77)])
        );
        assert_eq!(rng.next_u64(), stream(4, 4).next_u64());
        // One shot: site i is flipped iff the i-th uniform is below q.
        for seed in 0..50 {
            let mut a = stream(seed, 9);
            let mut b = a.clone();
            let got = flip_pattern_counts(&mut a, 6, 1, 0.4);
            let mask = (0..6).fold(0u64, |m, i| {
                if uniform01(&mut b) < 0.4 {
                    m | (1 << i)
                } else {
                    m
                }
            });
            assert_eq!(got, BTreeMap::from([(mask, 1)]));
            assert_eq!(a.next_u64(), b.next_u64());
        }
    }
}
