//! The inverse questions of planning (docs/budget.md): the largest scale factor on the noise
//! amplitudes, the longest time, or the largest system that keeps an error bound under a
//! target, each beside the worst-case answer.
//!
//! Every bound of §3 is non-decreasing in each `δ_i`, in `t` and in the number of sources, so
//! each question is a search for the edge of `{x : f(x) ≤ target}` with `f` non-decreasing:
//! doubling until `f` exceeds the target, then bisection. The answer returned is always the
//! lower end of the final bracket, so `f(answer) ≤ target` holds for the value returned (the
//! conservative side); the bracket is closed to a relative width of [`REL_TOL`].
//!
//! The errors are the global ones (§3) at one (observable, time) point:
//! * [`Which::Averaged`]: `E_avg + E_shot` of a trace averaged over `R` realizations (the
//!   half-width of the interval `certify` states; `E_shot = 0` when no shot count is given);
//! * [`Which::Single`]: `E_1`, one noisy evolution.
//!
//! The worst-case counterparts replace the error by `min(s_O, E_wc) (+ E_shot)`: no
//! cancellation between sources. With device errors (docs/method.md §7) their global term
//! `E_dev(t)` is added to `E_avg`, `E_1` and the worst case, each sum capped at `s_O`, as
//! `certify` adds it; [`largest_rate_sum`] answers the largest total incoherent rate. Every
//! error stays non-decreasing in the amplitudes, the time, the system and the rate. Pure
//! functions, no I/O.

use super::device::{add_device, GlobalDevice};
use super::global::{self, PointInputs, ShotData, SourceData};
use crate::model::noise::Redrawn;

/// Relative width of the final bisection bracket.
pub const REL_TOL: f64 = 1e-10;

/// Doublings tried before a search is declared unlimited (2^200 times the start).
const MAX_DOUBLINGS: usize = 200;

/// Which error the target applies to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Which {
    /// `E_avg + E_shot`, the half-width of the averaged trace's interval.
    Averaged,
    /// `E_1`, one noisy evolution.
    Single,
}

impl Which {
    /// The name used in reports.
    pub fn as_str(self) -> &'static str {
        match self {
            Which::Averaged => "averaged",
            Which::Single => "single",
        }
    }
}

/// Everything but the sources, the scale and the time: one (observable, time) point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PointSetting {
    /// `s_O`, the spread of the observable.
    pub s_o: f64,
    pub redrawn: Redrawn,
    /// Number of realizations R (≥ 1).
    pub realizations: usize,
    /// Shots per realization; `None`: no shot term.
    pub shots: Option<u64>,
    /// Failure probability of the fluctuation term of `E_avg` (after any Bonferroni split).
    pub p: f64,
    /// Failure probability of the shot term.
    pub alpha: f64,
    /// Failure probability of `E_1`.
    pub p_single: f64,
    /// The device errors' global sums (all zero without device sections).
    pub device: GlobalDevice,
}

impl PointSetting {
    /// `e + E_dev(t)` capped at `s_O`; `e` itself without device errors (bit for bit).
    fn with_device(&self, e: f64, t: f64) -> f64 {
        if self.device.is_zero() {
            e
        } else {
            add_device(e, self.device.term(self.s_o, t), self.s_o)
        }
    }
}

/// The sources with every `δ_i` multiplied by `scale`.
pub fn scaled(sources: &[SourceData], scale: f64) -> Vec<SourceData> {
    sources
        .iter()
        .map(|s| SourceData {
            delta: s.delta * scale,
            ..*s
        })
        .collect()
}

/// The shot term of the setting (0 without shot counts).
pub fn shot_term(set: &PointSetting) -> f64 {
    match set.shots {
        Some(s) => global::shot_hoeffding(set.s_o, &vec![s; set.realizations.max(1)], set.alpha),
        None => 0.0,
    }
}

/// All §3 terms at time `t` for the given (already scaled) sources.
pub fn point(set: &PointSetting, sources: &[SourceData], t: f64) -> global::PointBounds {
    let counts = vec![set.shots.unwrap_or(1); set.realizations.max(1)];
    let mut b = global::evaluate_point(&PointInputs {
        s_o: set.s_o,
        t,
        sources,
        sensitivities: None,
        redrawn: set.redrawn,
        realizations: set.realizations.max(1),
        shots: ShotData::Counts(&counts),
        p: set.p,
        alpha: set.alpha,
        p_single: set.p_single,
    });
    if set.shots.is_none() {
        b.e_shot = 0.0;
        b.half_width = b.e_avg;
    }
    b
}

/// The stochastic error `which` at time `t` (sources already scaled).
pub fn error(set: &PointSetting, sources: &[SourceData], t: f64, which: Which) -> f64 {
    let b = point(set, sources, t);
    match which {
        Which::Averaged if set.device.is_zero() => b.half_width,
        Which::Averaged => set.with_device(b.e_avg, t) + b.e_shot,
        Which::Single => set.with_device(b.e_one, t),
    }
}

/// The worst-case counterpart of [`error`]: `min(s_O, E_wc)`, plus `E_shot` for the averaged
/// trace.
pub fn worst_error(set: &PointSetting, sources: &[SourceData], t: f64, which: Which) -> f64 {
    let sens = global::global_sensitivities(sources.len(), set.s_o, t);
    let wc = set.with_device(set.s_o.min(global::worst_case(sources, &sens)), t);
    match which {
        Which::Averaged => wc + shot_term(set),
        Which::Single => wc,
    }
}

/// `y ≤ target`, with NaN counting as exceeding it.
fn within(y: f64, target: f64) -> bool {
    y <= target
}

/// The answer of a search for the largest `x ≥ 0` with `f(x) ≤ target`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Answer {
    /// `f(0) > target`: no value works (e.g. the shot term alone exceeds the target).
    Infeasible,
    /// `f` never exceeded the target (e.g. the target is at least the spread of O, which caps
    /// every bound).
    Unlimited,
    /// The largest value found; `f(value) ≤ target`, and `f` exceeds the target at
    /// `upper`, with `upper − value ≤ REL_TOL · upper` (for integers `upper = value + 1`).
    Found { value: f64, upper: f64 },
}

impl Answer {
    /// The value, if one was found.
    pub fn value(self) -> Option<f64> {
        match self {
            Answer::Found { value, .. } => Some(value),
            _ => None,
        }
    }
}

/// The largest real `x ≥ 0` with `f(x) ≤ target`, for a non-decreasing `f`; `start > 0` is
/// the first trial point of the doubling.
pub fn largest_real(f: impl Fn(f64) -> f64, target: f64, start: f64) -> Answer {
    if !within(f(0.0), target) {
        return Answer::Infeasible;
    }
    let (mut lo, mut hi) = (0.0, start);
    let mut n = 0;
    while f(hi) <= target {
        lo = hi;
        hi *= 2.0;
        n += 1;
        if n > MAX_DOUBLINGS || !hi.is_finite() {
            return Answer::Unlimited;
        }
    }
    // Invariant: f(lo) ≤ target < f(hi) (NaN counts as exceeding).
    for _ in 0..400 {
        if hi - lo <= REL_TOL * hi {
            break;
        }
        let mid = 0.5 * (lo + hi);
        if f(mid) <= target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Answer::Found {
        value: lo,
        upper: hi,
    }
}

/// The largest integer `n` in `[min, max]` with `f(n) ≤ target`, for a non-decreasing `f`.
/// `Unlimited` means `f(max) ≤ target` (the answer is at least `max`).
pub fn largest_integer(f: impl Fn(usize) -> f64, target: f64, min: usize, max: usize) -> Answer {
    if !within(f(min), target) {
        return Answer::Infeasible;
    }
    let (mut lo, mut hi) = (min, min.max(1));
    while f(hi) <= target {
        lo = hi;
        if hi >= max {
            return Answer::Unlimited;
        }
        hi = hi.saturating_mul(2).min(max);
    }
    while hi - lo > 1 {
        let mid = lo + (hi - lo) / 2;
        if f(mid) <= target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Answer::Found {
        value: lo as f64,
        upper: hi as f64,
    }
}

/// The sources with every one drawn again every `tau` (docs/method.md §1, "Noise that changes
/// during a run").
pub fn with_correlation_time(sources: &[SourceData], tau: f64) -> Vec<SourceData> {
    sources
        .iter()
        .map(|s| SourceData {
            window: Some(tau),
            ..*s
        })
        .collect()
}

/// The smallest correlation time the search tries, as a fraction of `t`.
pub const SHORTEST_CORRELATION_FRACTION: f64 = 1e-12;

/// The longest correlation time `τ`, common to every source, with `error(τ) ≤ target` at time
/// `t`: `Unlimited` when static noise (`τ ≥ t`) already meets the target, `Infeasible` when
/// even `τ = 10⁻¹²·t` does not; else bisection on `ln τ` in between. The error is not
/// guaranteed to be monotone in `τ` for every family (the bias factor is for the symmetric
/// ones), so `Found` promises only `error(value) ≤ target < error(upper)`.
pub fn longest_correlation_time(
    set: &PointSetting,
    sources: &[SourceData],
    t: f64,
    target: f64,
    which: Which,
) -> Answer {
    let f = |tau: f64| error(set, &with_correlation_time(sources, tau), t, which);
    if t.is_nan() || t <= 0.0 || within(f(t), target) {
        return Answer::Unlimited;
    }
    let mut lo = (t * SHORTEST_CORRELATION_FRACTION).ln();
    let mut hi = t.ln();
    if !within(f(lo.exp()), target) {
        return Answer::Infeasible;
    }
    for _ in 0..200 {
        if hi.exp() - lo.exp() <= REL_TOL * hi.exp() {
            break;
        }
        let mid = 0.5 * (lo + hi);
        if within(f(mid.exp()), target) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Answer::Found {
        value: lo.exp(),
        upper: hi.exp(),
    }
}

/// The largest scale factor λ on every amplitude with `error(λ) ≤ target` at time `t`.
pub fn largest_scale(
    set: &PointSetting,
    sources: &[SourceData],
    t: f64,
    target: f64,
    which: Which,
) -> Answer {
    largest_real(|l| error(set, &scaled(sources, l), t, which), target, 1.0)
}

/// The worst-case counterpart of [`largest_scale`].
pub fn largest_scale_worst(
    set: &PointSetting,
    sources: &[SourceData],
    t: f64,
    target: f64,
    which: Which,
) -> Answer {
    largest_real(
        |l| worst_error(set, &scaled(sources, l), t, which),
        target,
        1.0,
    )
}

/// The longest time with `error(t) ≤ target` at the recorded amplitudes; `t_start > 0` is the
/// first trial time.
pub fn longest_time(
    set: &PointSetting,
    sources: &[SourceData],
    target: f64,
    which: Which,
    t_start: f64,
) -> Answer {
    largest_real(|t| error(set, sources, t, which), target, t_start)
}

/// The worst-case counterpart of [`longest_time`].
pub fn longest_time_worst(
    set: &PointSetting,
    sources: &[SourceData],
    target: f64,
    which: Which,
    t_start: f64,
) -> Answer {
    largest_real(|t| worst_error(set, sources, t, which), target, t_start)
}

/// The largest total incoherent rate `Σ_i Γ_i` (per the time unit) with `error ≤ target` at
/// time `t`, the other errors as recorded (`worst`: the worst-case error). The error grows
/// linearly with the rate, so `Found` means the recorded rate sum may be replaced by any sum up
/// to the value.
pub fn largest_rate_sum(
    set: &PointSetting,
    sources: &[SourceData],
    t: f64,
    target: f64,
    which: Which,
    worst: bool,
) -> Answer {
    let f = |rate: f64| {
        let s = PointSetting {
            device: set.device.with_rate_sum(rate),
            ..*set
        };
        if worst {
            worst_error(&s, sources, t, which)
        } else {
            error(&s, sources, t, which)
        }
    };
    largest_real(f, target, 1.0 / t.max(f64::MIN_POSITIVE))
}

/// The ratio of a stochastic answer to the worst-case one (∞ when the worst case allows
/// nothing, `None` when either is not a number).
pub fn gain(stochastic: Answer, worst: Answer) -> Option<f64> {
    match (stochastic, worst) {
        (Answer::Found { value: s, .. }, Answer::Found { value: w, .. }) if w > 0.0 => Some(s / w),
        (Answer::Found { value: s, .. }, Answer::Found { .. }) if s > 0.0 => Some(f64::INFINITY),
        _ => None,
    }
}

/// The least-squares slope of `ln y` against `ln x` (the exponent of a power law).
pub fn log_log_slope(points: &[(f64, f64)]) -> f64 {
    let n = points.len() as f64;
    let (mut sx, mut sy) = (0.0, 0.0);
    for &(x, y) in points {
        sx += x.ln();
        sy += y.ln();
    }
    let (mx, my) = (sx / n, sy / n);
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for &(x, y) in points {
        let dx = x.ln() - mx;
        sxy += dx * (y.ln() - my);
        sxx += dx * dx;
    }
    sxy / sxx
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bounds::family;
    use crate::model::noise::Family;

    fn uniform(delta: f64, n: usize) -> Vec<SourceData> {
        vec![
            SourceData {
                family: Family::Uniform,
                constants: family::constants(&Family::Uniform),
                delta,
                systematic: 0.0,
                window: None,
            };
            n
        ]
    }

    fn setting(shots: Option<u64>) -> PointSetting {
        PointSetting {
            s_o: 2.0,
            redrawn: Redrawn::EveryRealization,
            realizations: 40,
            shots,
            p: 0.025,
            alpha: 0.025,
            p_single: 0.05,
            device: GlobalDevice::default(),
        }
    }

    #[test]
    fn bisection_finds_the_edge_of_a_known_function() {
        // f(x) = x², target 2: the edge is √2.
        let a = largest_real(|x| x * x, 2.0, 1.0);
        let Answer::Found { value, upper } = a else {
            panic!("{a:?}")
        };
        assert!(value * value <= 2.0 && upper * upper > 2.0);
        assert!((value - std::f64::consts::SQRT_2).abs() < 1e-9);
        assert_eq!(largest_real(|x| x + 3.0, 2.0, 1.0), Answer::Infeasible);
        assert_eq!(largest_real(|x| x.min(1.0), 2.0, 1.0), Answer::Unlimited);
        // Integers: largest n with n² ≤ 1000 is 31.
        let a = largest_integer(|n| (n * n) as f64, 1000.0, 1, 1 << 20);
        assert_eq!(a.value(), Some(31.0));
        assert_eq!(largest_integer(|n| n as f64, 1e9, 1, 64), Answer::Unlimited);
    }

    /// The longest correlation time: at the answer the error is within the target and just
    /// above it the target is exceeded; static noise within the target gives `Unlimited`.
    /// Against the closed form of the leading term: with many sources and no shots the
    /// averaged error is dominated by `r/√R ∝ √(tτ)` for `τ ≪ t`, so a target a quarter of the
    /// static error asks for `τ ≈ t/16` (within 20 %: the bias and the last window add a little).
    #[test]
    fn longest_correlation_time_is_where_the_error_reaches_the_target() {
        let set = setting(None);
        let src = uniform(1e-3, 10_000);
        let t = 1.0;
        let e_static = error(&set, &src, t, Which::Averaged);
        assert_eq!(
            longest_correlation_time(&set, &src, t, 2.0 * e_static, Which::Averaged),
            Answer::Unlimited
        );
        let target = 0.25 * e_static;
        let a = longest_correlation_time(&set, &src, t, target, Which::Averaged);
        let Answer::Found { value, upper } = a else {
            panic!("{a:?}")
        };
        let at = |tau: f64| error(&set, &with_correlation_time(&src, tau), t, Which::Averaged);
        assert!(at(value) <= target && at(upper) > target);
        assert!((value / (t / 16.0) - 1.0).abs() < 0.2, "{value}");
        // The shot term alone above the target: no correlation time helps.
        let shots = setting(Some(10));
        assert_eq!(
            longest_correlation_time(&shots, &src, t, 1e-3, Which::Averaged),
            Answer::Infeasible
        );
    }

    /// The worst case is linear in λ: `λ_wc = target / (s_O t Σ δ_i b_i)` in closed form
    /// (uniform: b = 1), and the bisection reproduces it.
    #[test]
    fn worst_case_scale_matches_the_closed_form() {
        let set = setting(None);
        let src = uniform(0.01, 50);
        let (t, target) = (2.0, 0.1);
        let closed = target / (2.0 * t * 50.0 * 0.01);
        let a = largest_scale_worst(&set, &src, t, target, Which::Single);
        assert!((a.value().unwrap() / closed - 1.0).abs() < 1e-9, "{a:?}");
    }

    /// At the returned scale the error equals the target to the bisection tolerance, and just
    /// above the bracket it exceeds it.
    #[test]
    fn the_error_at_the_answer_is_the_target() {
        let set = setting(Some(1000));
        let src = uniform(0.02, 30);
        let (t, target) = (1.0, 0.08);
        for which in [Which::Averaged, Which::Single] {
            let Answer::Found { value, upper } = largest_scale(&set, &src, t, target, which) else {
                panic!()
            };
            let at = error(&set, &scaled(&src, value), t, which);
            assert!(
                at <= target && (target - at) / target < 1e-8,
                "{which:?} {at}"
            );
            assert!(error(&set, &scaled(&src, upper), t, which) > target);
        }
    }

    #[test]
    fn a_target_below_the_shot_term_or_above_the_spread() {
        let set = setting(Some(10));
        let src = uniform(0.02, 30);
        let shot = shot_term(&set);
        let a = largest_scale(&set, &src, 1.0, 0.5 * shot, Which::Averaged);
        assert_eq!(a, Answer::Infeasible);
        let a = largest_scale(&set, &src, 1.0, 2.0, Which::Single);
        assert_eq!(a, Answer::Unlimited);
    }

    /// The gain of `E_1` over the worst case grows like √M (docs/budget.md).
    #[test]
    fn the_gain_grows_like_the_square_root_of_the_number_of_sources() {
        let set = setting(None);
        let mut pts = Vec::new();
        for m in [10usize, 100, 1000, 10000] {
            let src = uniform(0.01, m);
            let s = largest_scale(&set, &src, 1.0, 0.05, Which::Single);
            let w = largest_scale_worst(&set, &src, 1.0, 0.05, Which::Single);
            pts.push((m as f64, gain(s, w).unwrap()));
        }
        let slope = log_log_slope(&pts);
        assert!((slope - 0.5).abs() < 0.05, "slope {slope}, {pts:?}");
    }

    #[test]
    fn longest_time_is_the_edge_in_time() {
        let set = setting(Some(1000));
        let src = uniform(0.02, 30);
        let Answer::Found { value, .. } = longest_time(&set, &src, 0.1, Which::Averaged, 1.0)
        else {
            panic!()
        };
        let at = error(&set, &src, value, Which::Averaged);
        assert!(at <= 0.1 && (0.1 - at) < 1e-8);
        let w = longest_time_worst(&set, &src, 0.1, Which::Averaged, 1.0);
        assert!(w.value().unwrap() < value);
    }
}
