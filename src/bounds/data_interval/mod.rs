//! Data-driven confidence intervals for a common mean (docs/method.md §6.1): pure maths, no I/O.
//!
//! Exists so that an averaged trace can be certified from its realizations themselves, beside
//! the model statement: `R` independent values in a known range `[lo, hi]` with a common mean
//! give a confidence interval for that mean. Three methods, each rounded outward so the
//! reported interval is never narrower than the exact one:
//!
//! * [`betting_interval`]: the hedged-capital (betting) interval of Waudby-Smith & Ramdas,
//!   "Estimating means of bounded random variables by betting", JRSS-B 2024 (arXiv 2010.09686),
//!   exactly as confseq 0.0.11's `betting_ci` with its defaults, endpoints found by a bracketed
//!   root search instead of a grid ([`betting`]);
//! * [`empirical_bernstein_interval`]: the predictable plug-in empirical-Bernstein interval of
//!   the same paper, closed form, as confseq 0.0.11's `predmix_empbern_ci`
//!   ([`empirical_bernstein`]);
//! * [`clopper_pearson()`]: the exact binomial interval (Clopper & Pearson 1934)
//!   ([`clopper_pearson`](mod@clopper_pearson)).
//!
//! Derivation and numerical care: docs/method.md §6.1.

pub mod betting;
pub mod clopper_pearson;
pub mod empirical_bernstein;

pub use betting::betting_interval;
pub use clopper_pearson::clopper_pearson;
pub use empirical_bernstein::{empirical_bernstein_columns, empirical_bernstein_interval};

/// Which method gave an interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MeanMethod {
    /// Hedged capital process (betting), [`betting_interval`].
    Betting,
    /// Predictable plug-in empirical Bernstein, [`empirical_bernstein_interval`].
    EmpiricalBernstein,
    /// Exact binomial, [`clopper_pearson()`].
    ClopperPearson,
}

impl MeanMethod {
    /// The name written in certificates.
    pub fn as_str(self) -> &'static str {
        match self {
            MeanMethod::Betting => "betting",
            MeanMethod::EmpiricalBernstein => "empirical_bernstein",
            MeanMethod::ClopperPearson => "clopper_pearson",
        }
    }
}

/// Unit roundoff of f64, 2^-53.
pub(crate) const U: f64 = f64::EPSILON / 2.0;

/// Scales `values` into `z = (x − lo)/(hi − lo)`, clamped into [0, 1] (values slightly outside
/// the range from rounding). Each `z` carries an absolute error of at most `3u`; the caller
/// widens the final interval by [`map_back`] to cover it.
pub(crate) fn scale(values: &[f64], lo: f64, hi: f64) -> Vec<f64> {
    let w = hi - lo;
    values
        .iter()
        .map(|&x| ((x - lo) / w).clamp(0.0, 1.0))
        .collect()
}

/// Maps an interval `[l, u]` for the mean of the scaled values back to `[lo, hi]`, rounded
/// outward: the scaled values' own error (≤ 3u each, so ≤ 3u on their mean), the affine map's
/// rounding, and a few ulps of the range's scale. The result lies in `[lo, hi]`.
pub(crate) fn map_back(l: f64, u: f64, lo: f64, hi: f64) -> [f64; 2] {
    let w = hi - lo;
    let slack = 16.0 * U * (lo.abs() + hi.abs() + w.abs());
    let a = if l <= 0.0 { lo } else { lo + w * l - slack };
    let b = if u >= 1.0 { hi } else { lo + w * u + slack };
    [a.clamp(lo, hi), b.clamp(lo, hi)]
}

/// True when the inputs admit no informative interval: no values, an empty or degenerate range,
/// or a level that is not in (0, 1). The caller then returns `[lo, hi]`.
pub(crate) fn trivial(values: &[f64], lo: f64, hi: f64, alpha: f64) -> bool {
    values.is_empty()
        || lo.is_nan()
        || hi.is_nan()
        || lo >= hi
        || alpha.is_nan()
        || alpha <= 0.0
        || alpha >= 1.0
}

/// The predictable bets of confseq 0.0.11's `lambda_predmix_eb(z, truncation, alpha, fixed_n = n)`
/// with its defaults (prior mean 1/2, prior variance 1/4, one fake observation):
/// `λ_t = min(truncation, sqrt(2 ln(1/alpha) / (n σ̂²_{t−1})))`, `σ̂²_0 = 1/4`,
/// `μ̂_t = min((1/2 + Σ_{j≤t} z_j)/(t+1), 1)`, `σ̂²_t = (1/4 + Σ_{j≤t}(z_j − μ̂_j)²)/(t+1)`.
/// The order of operations follows NumPy's (`np.cumsum` is a sequential sum), so the bets
/// reproduce confseq's to the last bit or nearly; any rounding in them is harmless anyway, as any
/// predictable bet gives a valid test (super)martingale.
pub(crate) fn predmix_lambdas(z: &[f64], truncation: f64, alpha: f64) -> Vec<f64> {
    let n = z.len() as f64;
    let num = 2.0 * (1.0 / alpha).ln();
    let mut out = Vec::with_capacity(z.len());
    let mut sum = 0.0;
    let mut sq = 0.0;
    let mut sigma2_prev = 0.25;
    for (i, &zi) in z.iter().enumerate() {
        let lam = (num / (n * sigma2_prev)).sqrt();
        let lam = if lam.is_nan() { 0.0 } else { lam };
        out.push(lam.min(truncation));
        let t = (i + 1) as f64;
        sum += zi;
        let mu = ((0.5 + sum) / (t + 1.0)).min(1.0);
        let d = zi - mu;
        sq += d * d;
        sigma2_prev = (0.25 + sq) / (t + 1.0);
    }
    out
}

#[cfg(test)]
pub(crate) mod fixtures {
    //! The confseq 0.0.11 fixture (`tests/reference/data_interval/betting.json`), parsed once.

    /// One fixture case.
    pub struct Case {
        pub kind: String,
        pub alpha: f64,
        pub x: Vec<f64>,
        pub grid: [f64; 2],
        pub breaks: f64,
        pub exact: [f64; 2],
        pub empbern: [f64; 2],
    }

    /// Asserts `got` contains `reference` and is wider by at most 1e-9 relative (+1e-15).
    pub fn assert_outward_close(what: &str, got: [f64; 2], reference: [f64; 2]) {
        let tol = |v: f64| 1e-9 * v.abs() + 1e-15;
        let ([l, u], [el, eu]) = (got, reference);
        assert!(l <= el && el - l <= tol(el), "{what}: L {l} vs {el}");
        assert!(u >= eu && u - eu <= tol(eu), "{what}: U {u} vs {eu}");
    }

    fn pair(v: &serde_json::Value) -> [f64; 2] {
        [v[0].as_f64().unwrap(), v[1].as_f64().unwrap()]
    }

    /// All cases of betting.json (confseq 0.0.11, scipy 1.17.1, numpy 2.4.6).
    pub fn cases() -> Vec<Case> {
        let text = include_str!("../../../tests/reference/data_interval/betting.json");
        let v: serde_json::Value = serde_json::from_str(text).unwrap();
        v["cases"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| Case {
                kind: c["kind"].as_str().unwrap().to_string(),
                alpha: c["alpha"].as_f64().unwrap(),
                x: c["x"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|x| x.as_f64().unwrap())
                    .collect(),
                grid: pair(&c["grid"]),
                breaks: c["breaks"].as_f64().unwrap(),
                exact: pair(&c["exact"]),
                empbern: pair(&c["empbern"]),
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Smallest c with P(Bin(n, p) ≥ c) ≤ level: the exact pmf (Loader's form from
    /// `clopper_pearson`, accurate for every n) summed from the top.
    fn binomial_critical(n: u64, p: f64, level: f64) -> u64 {
        let mut tail = 0.0;
        for k in (1..=n).rev() {
            tail += clopper_pearson::dbinom(k, n, p).0;
            if tail > level {
                return k + 1;
            }
        }
        1
    }

    /// Coverage (seeded ChaCha20): 2000 trials each of Bernoulli(0.3), uniform, and a
    /// low-variance two-point law on [−1, 1], R = 20, α = 0.1; misses of betting and of
    /// empirical Bernstein are within the exact binomial allowance (Bin(2000, 0.1) at 1e-3).
    /// Clopper–Pearson likewise on Bin(20, 0.3) counts.
    #[test]
    fn coverage_within_binomial_allowance() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(17);
        let (trials, r, alpha) = (2000u64, 20usize, 0.1);
        let allowed = binomial_critical(trials, alpha, 1e-3);
        type Law = fn(&mut rand_chacha::ChaCha20Rng) -> f64;
        let laws: [(Law, f64); 3] = [
            (|g| if g.random::<f64>() < 0.3 { 1.0 } else { -1.0 }, -0.4),
            (|g| g.random::<f64>() * 2.0 - 1.0, 0.0),
            (|g| if g.random::<f64>() < 0.5 { 0.1 } else { 0.2 }, 0.15),
        ];
        for (law, mean) in laws {
            let (mut miss_b, mut miss_e) = (0, 0);
            for _ in 0..trials {
                let x: Vec<f64> = (0..r).map(|_| law(&mut rng)).collect();
                let b = betting_interval(&x, -1.0, 1.0, alpha);
                let e = empirical_bernstein_interval(&x, -1.0, 1.0, alpha);
                miss_b += u64::from(!(b[0] <= mean && mean <= b[1]));
                miss_e += u64::from(!(e[0] <= mean && mean <= e[1]));
            }
            assert!(miss_b < allowed, "betting misses {miss_b} ≥ {allowed}");
            assert!(
                miss_e < allowed,
                "empirical Bernstein misses {miss_e} ≥ {allowed}"
            );
        }
        let mut miss = 0;
        for _ in 0..trials {
            let k = (0..r).filter(|_| rng.random::<f64>() < 0.3).count() as u64;
            let [l, u] = clopper_pearson(k, r as u64, alpha);
            miss += u64::from(!(l <= 0.3 && 0.3 <= u));
        }
        assert!(miss < allowed, "Clopper–Pearson misses {miss} ≥ {allowed}");
    }

    /// Tightness: on low-variance data the betting interval is narrower than Hoeffding's
    /// two-sided `mean ± (hi − lo) sqrt(ln(2/α)/(2R))`.
    #[test]
    fn betting_narrower_than_hoeffding_on_low_variance() {
        for (r, alpha) in [(50usize, 0.05), (200, 0.01), (1000, 1e-3)] {
            let x: Vec<f64> = (0..r)
                .map(|i| 0.3 + 0.05 * ((i % 7) as f64 / 6.0))
                .collect();
            let [l, u] = betting_interval(&x, -1.0, 1.0, alpha);
            let hoeffding = 2.0 * 2.0 * ((2.0 / alpha).ln() / (2.0 * r as f64)).sqrt();
            assert!(
                u - l < 0.5 * hoeffding,
                "R={r}: width {} vs Hoeffding {hoeffding}",
                u - l
            );
            let mean = x.iter().sum::<f64>() / r as f64;
            assert!(l <= mean && mean <= u);
        }
    }

    #[test]
    fn method_names() {
        assert_eq!(MeanMethod::Betting.as_str(), "betting");
        assert_eq!(
            MeanMethod::EmpiricalBernstein.as_str(),
            "empirical_bernstein"
        );
        assert_eq!(MeanMethod::ClopperPearson.as_str(), "clopper_pearson");
    }

    #[test]
    fn trivial_inputs_give_the_range() {
        for f in [betting_interval, empirical_bernstein_interval] {
            assert_eq!(f(&[], -1.0, 1.0, 0.05), [-1.0, 1.0]);
            assert_eq!(f(&[0.5], 0.5, 0.5, 0.05), [0.5, 0.5]);
            assert_eq!(f(&[0.5], -1.0, 1.0, 0.0), [-1.0, 1.0]);
            let r = f(&[2.0, -3.0, 0.1], -1.0, 1.0, 0.05);
            assert!(r[0] >= -1.0 && r[1] <= 1.0 && r[0] <= r[1]);
        }
    }
}
