//! The spread between realizations, and the spread the record allows (docs/checks.md).
//!
//! Per observable and time, the R realization values `v_r` have an unbiased sample variance
//! `s²`. Under the record, with a common mean `μ` and independent realizations,
//! `E s² = (1/R) Σ_r Var v_r ≤ V_noise + V_shot` with
//!
//! * `V_noise = Σ_i δ_i² σ_i² e_i²` (Efron–Stein), `e_i` the sensitivity of the observable to
//!   source i (`s_O·t` globally), when g is redrawn every realization; 0 otherwise;
//! * `V_shot = h(μ) · (1/R) Σ_r 1/S_r` with `h(x) = (λmax − x)(x − λmin)` (Bhatia–Davis,
//!   then Jensen: `E h(x_r) ≤ h(μ)` because h is concave, so the realizations' differing true
//!   means `x_r` do not matter), with `μ` replaced by the largest `h` over a Hoeffding
//!   confidence interval for the mean. The derivations are in `docs/checks.md`.
//!
//! Floating point: the sample variance is a two-pass computation with the compensating term
//! `(Σ(v − m))²/R` (exact mean correction), summed in realization order; its relative error is
//! a few ulps times R, far below the statistical resolution of a variance from R values.

use crate::bounds::global::SourceData;
use crate::model::noise::Redrawn;

/// The mean and the unbiased sample variance of `values` (`None` for fewer than two values).
pub fn mean_and_variance(values: &[f64]) -> Option<(f64, f64)> {
    let n = values.len();
    if n < 2 {
        return None;
    }
    let mut sum = 0.0;
    for &v in values {
        sum += v;
    }
    let mean = sum / n as f64;
    let (mut squares, mut residual) = (0.0, 0.0);
    for &v in values {
        let d = v - mean;
        squares += d * d;
        residual += d;
    }
    let ss = (squares - residual * residual / n as f64).max(0.0);
    Some((mean, ss / (n - 1) as f64))
}

/// `Σ_i δ_i² σ_i² e_i²` over the sources, with sensitivities `e_i` (instance order).
///
/// A source with `δ_i e_i = 0` contributes nothing (so an unbounded σ never meets a zero).
pub fn efron_stein(sources: &[SourceData], sens: &[f64]) -> f64 {
    let mut sum = 0.0;
    for (s, &e) in sources.iter().zip(sens) {
        let a = s.delta * e;
        if a > 0.0 {
            let term = a * s.constants.sigma;
            sum += term * term;
        }
    }
    sum
}

/// The noise part of the variance between realizations: [`efron_stein`] when g is redrawn
/// every realization, 0 when it is redrawn every shot (the shots sample the noise, and the
/// shot term covers it) or once (the realizations share one draw).
pub fn noise_variance(redrawn: Redrawn, sources: &[SourceData], sens: &[f64]) -> f64 {
    match redrawn {
        Redrawn::EveryRealization => efron_stein(sources, sens),
        Redrawn::EveryShot | Redrawn::Once => 0.0,
    }
}

/// Half-width of Hoeffding's two-sided interval for the common mean of `r` independent
/// values in a range of width `s_o`, failure probability `gamma`: `s_o √(ln(2/γ)/(2r))`.
pub fn hoeffding_mean_radius(s_o: f64, r: usize, gamma: f64) -> f64 {
    s_o * ((2.0 / gamma).ln() / (2.0 * r as f64)).sqrt()
}

/// The largest `(λmax − x)(x − λmin)` over `x` in `[lo, hi] ∩ [λmin, λmax]`.
///
/// The function is concave with its vertex at the midpoint, so the maximum is at the midpoint
/// clamped into the interval. An interval that misses the spectrum gives 0.
pub fn bhatia_davis_max(lambda_min: f64, lambda_max: f64, lo: f64, hi: f64) -> f64 {
    let lo = lo.max(lambda_min);
    let hi = hi.min(lambda_max);
    if lo > hi {
        return 0.0;
    }
    let x = (0.5 * (lambda_min + lambda_max)).clamp(lo, hi);
    ((lambda_max - x) * (x - lambda_min)).max(0.0)
}

/// `V_shot = h · (1/R) Σ_r 1/S_r` for shot counts `S_r` and the maximised `h`; infinite if
/// a count is zero.
pub fn shot_variance_counts(h: f64, shots: &[u64]) -> f64 {
    if shots.is_empty() || shots.contains(&0) {
        return f64::INFINITY;
    }
    let mut inv = 0.0;
    for &s in shots {
        inv += 1.0 / s as f64;
    }
    h * inv / shots.len() as f64
}

/// `V_shot ≈ (1/R) Σ_r se_r²` from standard errors (an approximation: the errors are
/// themselves estimates).
pub fn shot_variance_stderr(stderr: &[f64]) -> f64 {
    if stderr.is_empty() {
        return f64::INFINITY;
    }
    let mut sum = 0.0;
    for &se in stderr {
        sum += se * se;
    }
    sum / stderr.len() as f64
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bounds::family;
    use crate::model::noise::Family;

    /// NumPy's `np.var(x, ddof=1)` of these values is 2.5 for [1, 2, 3, 4, 5] (definition),
    /// and the two-pass form keeps all digits when the values sit on a large offset, where
    /// the one-pass `Σx² − (Σx)²/n` loses them all.
    #[test]
    fn sample_variance_is_unbiased_and_stable_under_an_offset() {
        let (m, v) = mean_and_variance(&[1.0, 2.0, 3.0, 4.0, 5.0]).unwrap();
        assert_eq!((m, v), (3.0, 2.5));
        let shifted: Vec<f64> = [1.0, 2.0, 3.0, 4.0, 5.0].iter().map(|x| x + 1e9).collect();
        let (_, v) = mean_and_variance(&shifted).unwrap();
        assert!((v - 2.5).abs() < 1e-6, "{v}");
        assert!(mean_and_variance(&[1.0]).is_none());
        assert_eq!(mean_and_variance(&[0.3, 0.3, 0.3]).unwrap().1, 0.0);
    }

    /// Efron–Stein for one uniform source and O = Y on one spin with H = 0 (the example of
    /// docs/method.md §3): f(g) = sin(2δgt), whose exact variance 1/2 − sin(4δt)/(8δt) (closed form of
    /// E sin²(ag) for g uniform on [−1, 1], a = 2δt) stays below (2δt)²/3 = δ²σ²(s_O t)² and
    /// reaches it to leading order as δt → 0.
    #[test]
    fn efron_stein_bounds_the_exact_variance_of_the_ramsey_example() {
        let src = [SourceData {
            family: Family::Uniform,
            constants: family::constants(&Family::Uniform),
            delta: 0.2,
            systematic: 0.0,
            window: None,
        }];
        for &t in &[1e-3, 0.1, 1.0, 3.0, 10.0] {
            let a: f64 = 2.0 * 0.2 * t;
            let exact = 0.5 - (2.0 * a).sin() / (4.0 * a);
            let bound = efron_stein(&src, &[2.0 * t]);
            assert!(exact <= bound * (1.0 + 1e-12), "t={t}: {exact} > {bound}");
            if t <= 0.1 {
                assert!((exact / bound - 1.0).abs() < 1e-2, "t={t}");
            }
        }
        assert_eq!(noise_variance(Redrawn::Once, &src, &[2.0]), 0.0);
        assert_eq!(noise_variance(Redrawn::EveryShot, &src, &[2.0]), 0.0);
    }

    #[test]
    fn bhatia_davis_maximum_is_at_the_clamped_midpoint() {
        // Interval containing the midpoint of [−1, 1]: h = 1.
        assert_eq!(bhatia_davis_max(-1.0, 1.0, -0.2, 0.3), 1.0);
        // Interval right of the midpoint: h at its left end, (1 − 0.5)(0.5 + 1) = 0.75.
        assert_eq!(bhatia_davis_max(-1.0, 1.0, 0.5, 0.9), 0.75);
        // Clipped to the spectrum, and an interval outside it.
        assert_eq!(bhatia_davis_max(0.0, 1.0, 0.9, 1.5), 0.9 * (1.0 - 0.9));
        assert_eq!(bhatia_davis_max(0.0, 1.0, 2.0, 3.0), 0.0);
        // A two-point law on {λmin, λmax} with mean x attains h(x): p(1 − p)·s² with p = 0.25.
        let h = bhatia_davis_max(-1.0, 1.0, -0.5, -0.5);
        assert!((h - 0.25 * 0.75 * 4.0).abs() < 1e-15);
    }

    #[test]
    fn shot_variance_and_hoeffding_radius_have_their_closed_forms() {
        assert!((shot_variance_counts(1.0, &[100, 400]) - (0.01 + 0.0025) / 2.0).abs() < 1e-18);
        assert_eq!(shot_variance_counts(1.0, &[100, 0]), f64::INFINITY);
        assert!((shot_variance_stderr(&[0.1, 0.2]) - 0.025).abs() < 1e-17);
        // 2·√(ln(2/0.05)/(2·50)) = 2·√(ln 40 / 100).
        let r = hoeffding_mean_radius(2.0, 50, 0.05);
        assert!((r - 2.0 * (40f64.ln() / 100.0).sqrt()).abs() < 1e-15);
    }
}
