//! The bounds of docs/method.md §3 at one (time, observable) point, as pure functions.
//!
//! Every term is written on per-source *sensitivities* `e_i`: the factor that multiplies
//! `δ_i` in the Lipschitz bound `|∂f/∂g_i| ≤ δ_i e_i`. For the global statement
//! `e_i = s_O · t` for every source ([`global_sensitivities`]); the light-cone statement
//! (docs/method.md §5) passes `e_i = E_i(t) ≤ s_O t` and reuses the same functions unchanged.
//!
//! Floating point: every sum here has non-negative terms and is summed in instance order
//! (deterministic; plain ordered summation of non-negative terms has relative error at most
//! `n·ε`, far below the looseness of any bound). Products of many factors go through logarithms
//! (`Π φ_i = exp(Σ ln φ_i)`) and the final `− 1` through `expm1`. A source whose `δ_i e_i` is
//! zero contributes nothing and does not block a route (so `0 · ∞` never occurs).

use super::family::{self, FamilyConstants};
use crate::model::noise::{Family, Instance, Redrawn};

/// What the bounds need of one expanded noise source.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SourceData {
    pub family: Family,
    pub constants: FamilyConstants,
    /// `δ_i` in radians per the run's time unit (already × spread(V)/2).
    pub delta: f64,
    /// `m_i = |μ_i| + u_i`.
    pub systematic: f64,
    /// The correlation time τ (run's unit) of noise drawn again during an evolution; `None`:
    /// one draw per evolution ([`super::windows`]).
    pub window: Option<f64>,
}

impl SourceData {
    /// The data of one expanded instance.
    pub fn from_instance(i: &Instance) -> SourceData {
        SourceData {
            family: i.family,
            constants: family::constants(&i.family),
            delta: i.delta,
            systematic: i.systematic(),
            window: i.correlation_time,
        }
    }

    /// Whether this source is drawn again during `[0, t]` (`τ < t`).
    pub fn windowed_at(&self, t: f64) -> bool {
        self.window.is_some_and(|tau| tau < t)
    }
}

/// The sensitivities to use in the sums of squares (routes G, D, mixed and the Efron–Stein
/// variance) at time `t`: `sens` itself when no source is drawn again during `[0, t]`, else
/// each windowed source's [`super::windows::fluctuation_sensitivity`] (docs/method.md §3,
/// "Windows"). `sens` are the linear sensitivities (a bound on `Σ_w |∂f/∂g_w|/δ`).
pub fn fluctuation_sensitivities<'a>(
    sources: &[SourceData],
    sens: &'a [f64],
    s_o: f64,
    t: f64,
) -> std::borrow::Cow<'a, [f64]> {
    if !sources.iter().any(|s| s.windowed_at(t)) {
        return std::borrow::Cow::Borrowed(sens);
    }
    std::borrow::Cow::Owned(
        sources
            .iter()
            .zip(sens)
            .map(|(s, &e)| super::windows::fluctuation_sensitivity(e, s_o, s.window, t))
            .collect(),
    )
}

/// The route that gave a fluctuation term (docs/method.md §3).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FluctuationRoute {
    /// Gaussian concentration of Lipschitz functions (every source has a κ).
    Gaussian,
    /// Bounded differences, McDiarmid (every source has a finite width).
    BoundedDifferences,
    /// Sources split into a Gaussian and a bounded-difference group, `p/2` each.
    Mixed,
}

impl FluctuationRoute {
    /// The spelling used in certificates.
    pub fn as_str(self) -> &'static str {
        match self {
            FluctuationRoute::Gaussian => "gaussian",
            FluctuationRoute::BoundedDifferences => "bounded_differences",
            FluctuationRoute::Mixed => "mixed",
        }
    }
}

/// A fluctuation radius and the route that gave it; `route == None` means no route applies
/// and `value` is infinite.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Fluctuation {
    pub value: f64,
    pub route: Option<FluctuationRoute>,
}

/// The global sensitivities `e_i = s_O · t`, one per source.
pub fn global_sensitivities(n_sources: usize, s_o: f64, t: f64) -> Vec<f64> {
    vec![s_o * t; n_sources]
}

/// Whether source `i` contributes at all (`δ_i e_i > 0`).
fn active(s: &SourceData, e: f64) -> bool {
    s.delta * e > 0.0
}

/// `E_wc = Σ_i δ_i (b_i + m_i) e_i` (∞ if an active source is unbounded).
pub fn worst_case(sources: &[SourceData], sens: &[f64]) -> f64 {
    let mut sum = 0.0;
    for (s, &e) in sources.iter().zip(sens) {
        if active(s, e) {
            sum += s.delta * (s.constants.b + s.systematic) * e;
        }
    }
    sum
}

/// `E_sys = Σ_i δ_i m_i e_i`.
pub fn systematic(sources: &[SourceData], sens: &[f64]) -> f64 {
    let mut sum = 0.0;
    for (s, &e) in sources.iter().zip(sens) {
        if active(s, e) {
            sum += s.delta * s.systematic * e;
        }
    }
    sum
}

/// The global bias bound `E_bias = (s_O/2)(Π_i φ_i(2t) − 1)`, with `φ_i(y) = φ(y δ_i)`,
/// computed as `(s_O/2)·expm1(Σ_i ln φ(2tδ_i))` (sum in instance order). May be infinite.
///
/// Rounding: each `ln φ` errs upward or by an ulp (see [`family`]); the result is not capped
/// here (callers cap at `s_O`).
pub fn bias_global(sources: &[SourceData], s_o: f64, t: f64) -> f64 {
    bias_from_ln_sum(s_o, bias_ln_sum(sources, t))
}

/// `E_bias` from `Σ_i ln φ(2tδ_i)` ([`bias_ln_sum`], which does not depend on the
/// observable): `(s_O/2)·expm1(ln_sum)`, the last step of [`bias_global`].
pub fn bias_from_ln_sum(s_o: f64, ln_sum: f64) -> f64 {
    0.5 * s_o * ln_sum.exp_m1()
}

/// `Σ_i ln φ(2tδ_i)` in instance order, the observable-independent part of [`bias_global`]
/// (callers with many observables per time compute it once per time).
pub fn bias_ln_sum(sources: &[SourceData], t: f64) -> f64 {
    let mut ln_sum = 0.0;
    // Runs of instances with the same family, δ and correlation time (the usual case: one
    // source expanded per site) reuse the last value of ln φ; the value and the order of
    // summation are unchanged, only the quadrature of a truncated normal is not repeated.
    // A source drawn again during [0, t] contributes Σ_w ln φ(2δℓ_w) (docs/method.md §3,
    // "Windows"); `windows::ln_phi` gives exactly ln φ(2tδ) for the others.
    let mut last: Option<(Family, f64, Option<f64>, f64)> = None;
    for s in sources {
        if 2.0 * t * s.delta > 0.0 {
            let v = match last {
                Some((f, d, w, v)) if f == s.family && d == s.delta && w == s.window => v,
                _ => super::windows::ln_phi(&s.family, s.delta, s.window, t),
            };
            last = Some((s.family, s.delta, s.window, v));
            ln_sum += v;
        }
    }
    ln_sum
}

/// Route G: `L = √(Σ δ_i² κ_i² e_i²)`, `r = L √(2 ln(2/p))`; `None` if an active source has
/// no κ.
pub fn route_gaussian(sources: &[SourceData], sens: &[f64], p: f64) -> Option<f64> {
    let l2 = gaussian_l2(sources.iter().zip(sens.iter().copied()))?;
    Some(l2.sqrt() * (2.0 * (2.0 / p).ln()).sqrt())
}

/// Route D: `c_i = δ_i w_i e_i`, `r = √(Σ c_i²) √(ln(2/p)/2)`; `None` if an active source is
/// unbounded.
pub fn route_bounded_differences(sources: &[SourceData], sens: &[f64], p: f64) -> Option<f64> {
    let c2 = width_c2(sources.iter().zip(sens.iter().copied()))?;
    Some(c2.sqrt() * (0.5 * (2.0 / p).ln()).sqrt())
}

fn gaussian_l2<'a>(it: impl Iterator<Item = (&'a SourceData, f64)>) -> Option<f64> {
    let mut sum = 0.0;
    for (s, e) in it {
        if active(s, e) {
            let k = s.constants.kappa?;
            let term = s.delta * k * e;
            sum += term * term;
        }
    }
    Some(sum)
}

fn width_c2<'a>(it: impl Iterator<Item = (&'a SourceData, f64)>) -> Option<f64> {
    let mut sum = 0.0;
    for (s, e) in it {
        if active(s, e) {
            if !s.constants.width.is_finite() {
                return None;
            }
            let c = s.delta * s.constants.width * e;
            sum += c * c;
        }
    }
    Some(sum)
}

/// The mixed route: sources that have only a κ go to the Gaussian group, sources that have
/// only a finite width to the bounded-difference group, and sources that have both are put
/// all in one group or all in the other (two candidates, the smaller kept; both are fixed
/// before the data are seen). Each group is spent `p/2`: `r = r_G(p/2) + r_D(p/2)`.
///
/// Validity (docs/method.md §3): `F − EF = (F − E[F | g_D]) + (E[F | g_D] − EF)`; the first
/// part concentrates conditionally on `g_D` (Gaussian route), the second is a function of
/// `g_D` with the same bounded differences.
pub fn route_mixed(sources: &[SourceData], sens: &[f64], p: f64) -> Option<f64> {
    let half = 0.5 * p;
    let mut best: Option<f64> = None;
    for (l, c) in mixed_constants(sources, sens)? {
        let r = l * (2.0 * (2.0 / half).ln()).sqrt() + c * (0.5 * (2.0 / half).ln()).sqrt();
        best = Some(best.map_or(r, |b: f64| b.min(r)));
    }
    best
}

/// The fluctuation radius `r(p)` (two-sided, failure probability `p`): the smallest of the
/// routes that apply (G, D and the mixed route; ties go to G, then D).
///
/// The mixed route is a candidate also where G or D applies: a record of normal sources and
/// truncated normals with cutoff below their σ has only route G, yet the split (normals to G,
/// truncated normals to D) can be far smaller; without it, adding one two-point source (which
/// leaves only the mixed route) could *lower* `r` (found by the property tests of
/// `tests/properties.rs`). With every candidate kept, each is non-decreasing in the sources,
/// so `r` is too.
pub fn fluctuation(sources: &[SourceData], sens: &[f64], p: f64) -> Fluctuation {
    if p.is_nan() || p <= 0.0 {
        return Fluctuation {
            value: f64::INFINITY,
            route: None,
        };
    }
    let g = route_gaussian(sources, sens, p);
    let d = route_bounded_differences(sources, sens, p);
    smallest_route(g, d, route_mixed(sources, sens, p))
}

/// The smallest of the routes that apply, ties to G, then D, then the mixed route; no route:
/// an infinite radius.
fn smallest_route(g: Option<f64>, d: Option<f64>, mixed: Option<f64>) -> Fluctuation {
    let pick = match (g, d) {
        (Some(g), Some(d)) if d < g => Some((d, FluctuationRoute::BoundedDifferences)),
        (Some(g), _) => Some((g, FluctuationRoute::Gaussian)),
        (None, Some(d)) => Some((d, FluctuationRoute::BoundedDifferences)),
        (None, None) => None,
    };
    let pick = match (pick, mixed) {
        (Some((v, _)), Some(m)) if m < v => Some((m, FluctuationRoute::Mixed)),
        (None, Some(m)) => Some((m, FluctuationRoute::Mixed)),
        (pick, _) => pick,
    };
    match pick {
        Some((value, route)) => Fluctuation {
            value,
            route: Some(route),
        },
        None => Fluctuation {
            value: f64::INFINITY,
            route: None,
        },
    }
}

/// The route constants of [`fluctuation`] at fixed sensitivities, so that `r(p)` at any `p`
/// is a closed-form rescaling (a logarithm and a square root or two):
/// `r_G(p) = L √(2 ln(2/p))`, `r_D(p) = C √(ln(2/p)/2)`, mixed `r_G(p/2) + r_D(p/2)`.
/// [`FluctuationScale::at`] gives the value of [`fluctuation`] bit for bit (the same
/// operations in the same order).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FluctuationScale {
    /// `L = √(Σ δ_i² κ_i² e_i²)` of route G; `None` if an active source has no κ.
    pub gaussian: Option<f64>,
    /// `C = √(Σ c_i²)` of route D; `None` if an active source is unbounded.
    pub bounded_differences: Option<f64>,
    /// `(L, C)` of the two candidates of the mixed route (sources with both constants all in
    /// the Gaussian group, then all in the bounded-difference group); `None` if an active
    /// source has neither constant.
    pub mixed: Option<[(f64, f64); 2]>,
}

/// The route constants of the sources at sensitivities `sens` (see [`FluctuationScale`]).
pub fn fluctuation_scale(sources: &[SourceData], sens: &[f64]) -> FluctuationScale {
    let gaussian = gaussian_l2(sources.iter().zip(sens.iter().copied())).map(f64::sqrt);
    let bounded_differences = width_c2(sources.iter().zip(sens.iter().copied())).map(f64::sqrt);
    let mixed = mixed_constants(sources, sens);
    FluctuationScale {
        gaussian,
        bounded_differences,
        mixed,
    }
}

/// The `(L, C)` pairs of [`route_mixed`]'s two candidates.
fn mixed_constants(sources: &[SourceData], sens: &[f64]) -> Option<[(f64, f64); 2]> {
    let mut out = [(0.0, 0.0); 2];
    for (slot, both_to_gaussian) in out.iter_mut().zip([true, false]) {
        let mut l2 = 0.0;
        let mut c2 = 0.0;
        for (s, &e) in sources.iter().zip(sens) {
            if !active(s, e) {
                continue;
            }
            let kappa = s.constants.kappa;
            let finite = s.constants.width.is_finite();
            let to_gaussian = match (kappa, finite) {
                (Some(_), true) => both_to_gaussian,
                (Some(_), false) => true,
                (None, true) => false,
                (None, false) => return None,
            };
            if to_gaussian {
                let term = s.delta * kappa.unwrap_or(0.0) * e;
                l2 += term * term;
            } else {
                let c = s.delta * s.constants.width * e;
                c2 += c * c;
            }
        }
        *slot = (l2.sqrt(), c2.sqrt());
    }
    Some(out)
}

impl FluctuationScale {
    /// `r(p)` and its route: [`fluctuation`] at the sensitivities this was made from.
    pub fn at(&self, p: f64) -> Fluctuation {
        if p.is_nan() || p <= 0.0 {
            return Fluctuation {
                value: f64::INFINITY,
                route: None,
            };
        }
        let g = self.gaussian.map(|l| l * (2.0 * (2.0 / p).ln()).sqrt());
        let d = self
            .bounded_differences
            .map(|c| c * (0.5 * (2.0 / p).ln()).sqrt());
        let mixed = self.mixed.map(|candidates| {
            let half = 0.5 * p;
            let mut best: Option<f64> = None;
            for (l, c) in candidates {
                let r = l * (2.0 * (2.0 / half).ln()).sqrt() + c * (0.5 * (2.0 / half).ln()).sqrt();
                best = Some(best.map_or(r, |b: f64| b.min(r)));
            }
            best.unwrap_or(f64::INFINITY)
        });
        smallest_route(g, d, mixed)
    }
}

/// The fluctuation term of the averaged value (docs/method.md §3 table): `None` when g is redrawn
/// every shot (the shot term covers it), `r/√R` for every realization, `r` for once.
pub fn averaged_fluctuation(redrawn: Redrawn, r: f64, realizations: usize) -> Option<f64> {
    match redrawn {
        Redrawn::EveryShot => None,
        Redrawn::EveryRealization => Some(r / (realizations.max(1) as f64).sqrt()),
        Redrawn::Once => Some(r),
    }
}

/// Hoeffding's shot term `s_O √(Σ_r 1/(R² S_r)) √(ln(2/α)/2)` for the mean over `R`
/// realizations of `S_r` shots each. Infinite if a count is zero or the list is empty.
pub fn shot_hoeffding(s_o: f64, shots: &[u64], alpha: f64) -> f64 {
    if shots.is_empty() || shots.contains(&0) || alpha.is_nan() || alpha <= 0.0 {
        return f64::INFINITY;
    }
    let mut inv = 0.0;
    for &s in shots {
        inv += 1.0 / s as f64;
    }
    shot_hoeffding_from_sum(s_o, shots.len(), inv, alpha)
}

/// [`shot_hoeffding`] from `inv_sum = Σ_r 1/S_r` (summed in realization order, every
/// `S_r ≥ 1`), for callers that accumulate the sum while streaming the counts.
pub fn shot_hoeffding_from_sum(s_o: f64, realizations: usize, inv_sum: f64, alpha: f64) -> f64 {
    if realizations == 0 || alpha.is_nan() || alpha <= 0.0 {
        return f64::INFINITY;
    }
    let r = realizations as f64;
    s_o * (inv_sum / (r * r)).sqrt() * (0.5 * (2.0 / alpha).ln()).sqrt()
}

/// The normal-approximation shot term `z_{1−α/2} √(Σ_r se_r²) / R` (approximate: a
/// certificate must say so).
pub fn shot_normal(stderr: &[f64], alpha: f64) -> f64 {
    if stderr.is_empty() || alpha.is_nan() || alpha <= 0.0 {
        return f64::INFINITY;
    }
    let mut sum = 0.0;
    for &se in stderr {
        sum += se * se;
    }
    shot_normal_from_sum(stderr.len(), sum, alpha)
}

/// [`shot_normal`] from `sq_sum = Σ_r se_r²` (summed in realization order).
pub fn shot_normal_from_sum(realizations: usize, sq_sum: f64, alpha: f64) -> f64 {
    if realizations == 0 || alpha.is_nan() || alpha <= 0.0 {
        return f64::INFINITY;
    }
    let r = realizations as f64;
    super::quantiles::normal_upper_quantile(0.5 * alpha) * sq_sum.sqrt() / r
}

/// The shot information of one (time, observable) point: one entry per realization.
#[derive(Debug, Clone, Copy)]
pub enum ShotData<'a> {
    Counts(&'a [u64]),
    StdErr(&'a [f64]),
}

/// Everything [`evaluate_point`] needs for one (time, observable) point.
#[derive(Debug, Clone, Copy)]
pub struct PointInputs<'a> {
    /// `s_O = λmax − λmin`.
    pub s_o: f64,
    /// Time since the start of the evolution, in the run's time unit.
    pub t: f64,
    pub sources: &'a [SourceData],
    /// Per-source sensitivities; `None` for the global `s_O · t`.
    pub sensitivities: Option<&'a [f64]>,
    pub redrawn: Redrawn,
    /// Number of realizations R.
    pub realizations: usize,
    pub shots: ShotData<'a>,
    /// Failure probability of the fluctuation term of `E_avg` at this point (after Bonferroni).
    pub p: f64,
    /// Failure probability of the shot term at this point (after Bonferroni).
    pub alpha: f64,
    /// Failure probability of the one-evolution statement `E_1` at this point.
    pub p_single: f64,
}

/// All terms of docs/method.md §3 at one point. Every field is non-negative; `e_one`, `e_avg` are
/// capped at `s_O`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PointBounds {
    pub e_wc: f64,
    pub e_sys: f64,
    pub e_bias: f64,
    /// The fluctuation term of `E_avg` (0 when g is redrawn every shot).
    pub fluctuation: f64,
    /// The same term for static noise (every correlation time removed), for the comparison
    /// of format 1.4; equal to `fluctuation` when no source is drawn again.
    pub fluctuation_static: f64,
    /// The route of that term; `None` when there is no term (every shot) or no route applies
    /// (then `fluctuation` is infinite).
    pub route: Option<FluctuationRoute>,
    /// `r(p_single)`, the fluctuation of one evolution, and its route.
    pub fluctuation_one: f64,
    pub route_one: Option<FluctuationRoute>,
    pub e_one: f64,
    pub e_avg: f64,
    pub e_shot: f64,
    pub shot_approximate: bool,
    /// `E_avg + E_shot`: the half-width of the interval for the ideal value.
    pub half_width: f64,
}

/// Evaluates every term of docs/method.md §3 at one point.
pub fn evaluate_point(inp: &PointInputs) -> PointBounds {
    let owned;
    let sens: &[f64] = match inp.sensitivities {
        Some(s) => s,
        None => {
            owned = global_sensitivities(inp.sources.len(), inp.s_o, inp.t);
            &owned
        }
    };
    let e_wc = worst_case(inp.sources, sens);
    let e_sys = systematic(inp.sources, sens);
    let e_bias = bias_global(inp.sources, inp.s_o, inp.t);
    let linear = sens;
    let sens = &*fluctuation_sensitivities(inp.sources, sens, inp.s_o, inp.t);
    let one = fluctuation(inp.sources, sens, inp.p_single);
    let e_one = cap(inp.s_o, e_wc, e_sys + e_bias + one.value);
    let (fluct, route) = match inp.redrawn {
        Redrawn::EveryShot => (0.0, None),
        _ => {
            let r = fluctuation(inp.sources, sens, inp.p);
            let v = averaged_fluctuation(inp.redrawn, r.value, inp.realizations).unwrap_or(0.0);
            (v, r.route)
        }
    };
    let e_avg = cap(inp.s_o, e_wc, e_sys + e_bias + fluct);
    let fluctuation_static = static_fluctuation(
        inp.sources,
        linear,
        inp.t,
        (inp.p, inp.redrawn, inp.realizations),
        fluct,
    );
    let (e_shot, shot_approximate) = match inp.shots {
        ShotData::Counts(c) => (shot_hoeffding(inp.s_o, c, inp.alpha), false),
        ShotData::StdErr(se) => (shot_normal(se, inp.alpha), true),
    };
    PointBounds {
        e_wc,
        e_sys,
        e_bias,
        fluctuation: fluct,
        fluctuation_static,
        route,
        fluctuation_one: one.value,
        route_one: one.route,
        e_one,
        e_avg,
        e_shot,
        shot_approximate,
        half_width: e_avg + e_shot,
    }
}

/// The fluctuation term of `E_avg` that the same sensitivities would give if no source were
/// drawn again during the evolution (the linear sensitivities in the sums of squares): for the
/// certificate's comparison with static noise (format 1.4). `windowed`, the term actually
/// used, when no source is windowed at `t` (then the two are the same number).
pub fn static_fluctuation(
    sources: &[SourceData],
    linear: &[f64],
    t: f64,
    (p, redrawn, realizations): (f64, Redrawn, usize),
    windowed: f64,
) -> f64 {
    if redrawn == Redrawn::EveryShot || !sources.iter().any(|s| s.windowed_at(t)) {
        return windowed;
    }
    let r = fluctuation(sources, linear, p);
    averaged_fluctuation(redrawn, r.value, realizations).unwrap_or(0.0)
}

/// `min(s_O, E_wc, rest)`, with NaN treated as no information (∞): how [`evaluate_point`]
/// caps `E_1` and `E_avg`, for callers that rebuild one of them from its terms.
pub fn cap(s_o: f64, e_wc: f64, rest: f64) -> f64 {
    let rest = if rest.is_nan() { f64::INFINITY } else { rest };
    s_o.min(e_wc).min(rest)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    fn uniform(delta: f64) -> SourceData {
        SourceData {
            family: Family::Uniform,
            constants: family::constants(&Family::Uniform),
            delta,
            systematic: 0.0,
            window: None,
        }
    }

    fn source(f: Family, delta: f64, m: f64) -> SourceData {
        SourceData {
            family: f,
            constants: family::constants(&f),
            delta,
            systematic: m,
            window: None,
        }
    }

    /// Least-squares slope of log y against log x.
    fn slope(xs: &[f64], ys: &[f64]) -> f64 {
        let n = xs.len() as f64;
        let lx: Vec<f64> = xs.iter().map(|x| x.ln()).collect();
        let ly: Vec<f64> = ys.iter().map(|y| y.ln()).collect();
        let mx = lx.iter().sum::<f64>() / n;
        let my = ly.iter().sum::<f64>() / n;
        let mut sxy = 0.0;
        let mut sxx = 0.0;
        for (x, y) in lx.iter().zip(&ly) {
            sxy += (x - mx) * (y - my);
            sxx += (x - mx) * (x - mx);
        }
        sxy / sxx
    }

    /// The check of docs/method.md §3 (exact closed form of the one-site Ramsey run, H = 0,
    /// O = X, g uniform): the exact bias 1 − sin(2δt)/(2δt) never exceeds the bound, and the
    /// ratio tends to 1 as δt → 0 (both ≈ (2δt)²/6).
    #[test]
    fn ramsey_bias_is_below_the_bound_and_attains_it_to_leading_order() {
        let delta: f64 = 1.0;
        for &t in &[1e-3, 1e-2, 0.1, 0.5, 1.0, 2.0, 5.0] {
            let a = 2.0 * delta * t;
            // 1 − sin(a)/a, by its series below 0.1 (cancellation otherwise).
            let exact = if a < 0.1 {
                a * a / 6.0 - a.powi(4) / 120.0 + a.powi(6) / 5040.0
            } else {
                1.0 - a.sin() / a
            };
            let bound = bias_global(&[uniform(delta)], 2.0, t);
            assert!(exact <= bound, "t={t}: exact {exact} > bound {bound}");
            if t <= 1e-2 {
                assert!(
                    (bound / exact - 1.0).abs() < 1e-3,
                    "t={t}: ratio {}",
                    bound / exact
                );
            }
        }
    }

    /// Worked example: for O = Y, f(g) = sin(2δgt) has derivative 2δt = s_O δ t at g = 0, so
    /// the Lipschitz constant used by route G (before κ) is attained.
    #[test]
    fn route_gaussian_lipschitz_constant_is_attained_for_y() {
        let (delta, t, s_o): (f64, f64, f64) = (0.3, 0.7, 2.0);
        let src = [uniform(delta)];
        let sens = global_sensitivities(1, s_o, t);
        let p = 0.05;
        let r = route_gaussian(&src, &sens, p).unwrap();
        let lipschitz = r / (2.0 * (2.0 / p).ln()).sqrt() / src[0].constants.kappa.unwrap();
        let h = 1e-6;
        let slope = ((2.0 * delta * h * t).sin() - (-2.0 * delta * h * t).sin()) / (2.0 * h);
        assert!(
            (lipschitz - slope).abs() < 1e-9 * slope,
            "{lipschitz} vs {slope}"
        );
    }

    /// Worked example: n uncoupled sites, O = Σ_i Y_i, f(g) = Σ_i sin(2δ g_i t). Its exact
    /// standard deviation is √n·sd(sin(2δgt)) with Var sin(ag) = 1/2 − sin(2a)/(4a) for g
    /// uniform. Source i moves only its own term (spread 2), so its sensitivity is 2t; route G
    /// then gives L = 2tδκ√n, and Gaussian concentration implies sd ≤ L (Gaussian Poincaré
    /// inequality). The ratio L/sd is the same for every n: independent sources add in
    /// quadrature.
    #[test]
    fn independent_sources_add_in_quadrature() {
        let (delta, t): (f64, f64) = (0.05, 1.0);
        let a = 2.0 * delta * t;
        let var1 = 0.5 - (2.0 * a).sin() / (4.0 * a);
        let mut ratios = Vec::new();
        for &n in &[1usize, 4, 16, 256, 4096] {
            let src = vec![uniform(delta); n];
            let sens = vec![2.0 * t; n];
            let p = 2.0 * (-0.5f64).exp(); // so that √(2 ln(2/p)) = 1 and r = L
            let l = route_gaussian(&src, &sens, p).unwrap();
            let sd = (n as f64 * var1).sqrt();
            assert!(sd <= l, "n={n}: sd {sd} > L {l}");
            ratios.push(l / sd);
        }
        for r in &ratios {
            assert!((r / ratios[0] - 1.0).abs() < 1e-12);
        }
    }

    /// Smallest k with P(Bin(n, p) ≥ k) ≤ level (exact sum of the pmf in log space).
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

    /// Monte Carlo check of E_1 (an exact "simulation": one spin with H = 0 and M uniform
    /// sources δ g_i Z on it has f_X(g) = cos(2δtΣg_i), f_Y(g) = sin(2δtΣg_i) in closed form).
    /// In N draws, the number of draws with |f(g) − f_ideal| > E_1(p) must not exceed what a
    /// one-sided binomial test at level 0.001 allows under P(exceed) ≤ p.
    #[test]
    fn monte_carlo_exceedances_of_e_one_are_within_the_binomial_allowance() {
        let (m, delta, t, s_o) = (50usize, 0.02, 1.0, 2.0);
        let src = vec![uniform(delta); m];
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(20_261_130);
        let n_draws = 20_000u64;
        for &p in &[0.01, 0.2, 0.6, 0.95] {
            let inp = PointInputs {
                s_o,
                t,
                sources: &src,
                sensitivities: None,
                redrawn: Redrawn::Once,
                realizations: 1,
                shots: ShotData::Counts(&[1000]),
                p,
                alpha: 0.05,
                p_single: p,
            };
            let b = evaluate_point(&inp);
            assert!(
                b.e_one < b.e_wc,
                "the check must not be decided by the worst case"
            );
            let (mut exceed_x, mut exceed_y) = (0u64, 0u64);
            for _ in 0..n_draws {
                let mut sum = 0.0;
                for _ in 0..m {
                    sum += rng.random_range(-1.0..=1.0);
                }
                let phase = 2.0 * delta * t * sum;
                // f_ideal = 1 for X and 0 for Y.
                exceed_x += u64::from((phase.cos() - 1.0).abs() > b.e_one);
                exceed_y += u64::from(phase.sin().abs() > b.e_one);
            }
            let k = binomial_critical(n_draws, p, 0.001);
            assert!(
                exceed_x < k,
                "X, p={p}: {exceed_x} exceedances, allowance below {k}"
            );
            assert!(
                exceed_y < k,
                "Y, p={p}: {exceed_y} exceedances, allowance below {k}"
            );
        }
    }

    /// For equal per-source noise, the fluctuation grows like √M and the worst case like M
    /// (log–log slopes over M = 10…10⁵); the bias is second order in the amplitude.
    #[test]
    fn scaling_exponents_match_the_theory() {
        let ms = [10usize, 100, 1000, 10_000, 100_000];
        let mut fl = Vec::new();
        let mut wc = Vec::new();
        for &m in &ms {
            let src = vec![uniform(1e-4); m];
            let sens = global_sensitivities(m, 2.0, 1.0);
            fl.push(fluctuation(&src, &sens, 0.05).value);
            wc.push(worst_case(&src, &sens));
        }
        let xs: Vec<f64> = ms.iter().map(|&m| m as f64).collect();
        assert!((slope(&xs, &fl) - 0.5).abs() < 0.02);
        assert!((slope(&xs, &wc) - 1.0).abs() < 0.02);
        let deltas = [1e-5, 3e-5, 1e-4, 3e-4, 1e-3];
        let bias: Vec<f64> = deltas
            .iter()
            .map(|&d| bias_global(&vec![uniform(d); 20], 2.0, 1.0))
            .collect();
        assert!((slope(&deltas, &bias) - 2.0).abs() < 0.02);
    }

    fn mixed_sources() -> Vec<SourceData> {
        vec![
            source(Family::Normal { sigma: 0.5 }, 0.01, 0.1),
            source(Family::TwoPoint, 0.02, 0.0),
            source(
                Family::TruncatedNormal {
                    sigma: 1.0,
                    cutoff: 2.0,
                },
                0.015,
                0.05,
            ),
            source(
                Family::Bounded {
                    lower: -1.0,
                    upper: 2.0,
                    std: 0.7,
                    symmetric: false,
                },
                0.01,
                0.0,
            ),
            uniform(0.03),
        ]
    }

    #[test]
    fn mixed_records_use_the_mixed_route_and_unbounded_sources_have_no_worst_case() {
        let src = mixed_sources();
        let sens = global_sensitivities(src.len(), 2.0, 1.0);
        let f = fluctuation(&src, &sens, 0.05);
        assert_eq!(f.route, Some(FluctuationRoute::Mixed));
        assert!(f.value.is_finite() && f.value > 0.0);
        assert_eq!(worst_case(&src, &sens), f64::INFINITY);
        // A normal source with δ = 0 does not block route D nor make E_wc infinite.
        let mut quiet = src.clone();
        quiet[0].delta = 0.0;
        assert!(worst_case(&quiet, &sens).is_finite());
        assert_eq!(
            fluctuation(&quiet, &sens, 0.05).route,
            Some(FluctuationRoute::BoundedDifferences)
        );
    }

    #[test]
    fn every_term_is_non_negative_capped_and_monotone_in_the_confidence() {
        let src = mixed_sources();
        let shots = [100u64, 250, 80];
        for &t in &[0.0, 0.1, 1.0, 10.0, 1000.0] {
            for redrawn in [Redrawn::EveryShot, Redrawn::EveryRealization, Redrawn::Once] {
                let mut last: Option<PointBounds> = None;
                for &p in &[0.2, 0.05, 1e-3, 1e-6, 1e-12] {
                    let inp = PointInputs {
                        s_o: 2.0,
                        t,
                        sources: &src,
                        sensitivities: None,
                        redrawn,
                        realizations: shots.len(),
                        shots: ShotData::Counts(&shots),
                        p,
                        alpha: p,
                        p_single: p,
                    };
                    let b = evaluate_point(&inp);
                    for v in [
                        b.e_wc,
                        b.e_sys,
                        b.e_bias,
                        b.fluctuation,
                        b.e_one,
                        b.e_avg,
                        b.e_shot,
                    ] {
                        assert!(v >= 0.0, "negative term at t={t}");
                    }
                    assert!(b.e_one <= 2.0 && b.e_avg <= 2.0);
                    assert!(b.e_avg <= b.e_wc && b.e_one <= b.e_wc);
                    if let Some(prev) = last {
                        assert!(b.e_avg >= prev.e_avg && b.e_one >= prev.e_one);
                        assert!(b.e_shot >= prev.e_shot);
                    }
                    last = Some(b);
                }
            }
        }
    }

    /// Regression (found by tests/properties.rs): a truncated normal with cutoff below its σ
    /// and a normal source have only route G; adding a quiet two-point source left only the
    /// mixed route, which was smaller, so adding a source lowered `r`. The mixed split is now a
    /// candidate beside G and D.
    #[test]
    fn adding_a_source_never_lowers_the_fluctuation() {
        let tn = Family::TruncatedNormal {
            sigma: 2.2597299275101563,
            cutoff: 1.0,
        };
        let before = vec![
            source(tn, 1.0, 0.0),
            source(Family::Normal { sigma: 1.0 }, 1.0, 0.0),
        ];
        let mut after = before.clone();
        after.insert(0, source(Family::TwoPoint, 0.004294126611186434, 0.0));
        let p = 0.5011872336272722;
        let r0 = fluctuation(&before, &global_sensitivities(2, 0.25, 1.0), p);
        let r1 = fluctuation(&after, &global_sensitivities(3, 0.25, 1.0), p);
        assert_eq!(r0.route, Some(FluctuationRoute::Mixed));
        assert_eq!(r1.route, Some(FluctuationRoute::Mixed));
        assert!(r0.value <= r1.value, "{} > {}", r0.value, r1.value);
        // Route G alone (what `fluctuation` gave before) is larger than the mixed split here.
        let g = route_gaussian(&before, &global_sensitivities(2, 0.25, 1.0), p).unwrap();
        assert!(r0.value < g);
    }

    /// The route constants rescale to `fluctuation` bit for bit, for every route (G, D,
    /// mixed, none), at zero and non-zero sensitivities and across ten decades of p.
    #[test]
    fn the_fluctuation_scale_reproduces_fluctuation_at_every_p() {
        let bounded_without_kappa = source(
            Family::Bounded {
                lower: -1.0,
                upper: 2.0,
                std: 0.7,
                symmetric: false,
            },
            0.01,
            0.0,
        );
        let mut no_route = mixed_sources();
        no_route[1].constants.width = f64::INFINITY;
        no_route[1].constants.kappa = None;
        let cases: Vec<Vec<SourceData>> = vec![
            vec![uniform(0.02); 5],
            vec![source(Family::Normal { sigma: 0.5 }, 0.01, 0.1); 3],
            vec![bounded_without_kappa, uniform(0.01)],
            mixed_sources(),
            no_route,
        ];
        let mut routes = Vec::new();
        for src in &cases {
            for &t in &[0.0, 0.3, 2.0] {
                let sens = global_sensitivities(src.len(), 2.0, t);
                let scale = fluctuation_scale(src, &sens);
                for &p in &[1.0, 0.5, 0.05, 1e-3, 1e-9, 1e-300, 0.0, f64::NAN] {
                    let want = fluctuation(src, &sens, p);
                    let got = scale.at(p);
                    assert_eq!(got.route, want.route, "t={t} p={p}");
                    assert_eq!(got.value.to_bits(), want.value.to_bits(), "t={t} p={p}");
                    routes.push(want.route);
                }
            }
        }
        for r in [
            Some(FluctuationRoute::Gaussian),
            Some(FluctuationRoute::BoundedDifferences),
            Some(FluctuationRoute::Mixed),
            None,
        ] {
            assert!(routes.contains(&r), "{r:?} not exercised");
        }
    }

    /// Hoeffding's term for one realization of 100 shots, s_O = 2, α = 0.05:
    /// 2·√(1/100)·√(ln 40 / 2) = 0.271620… (hand evaluation of the formula).
    #[test]
    fn shot_terms_have_the_closed_form_values() {
        let v = shot_hoeffding(2.0, &[100], 0.05);
        assert!((v - 0.2 * (0.5 * 40f64.ln()).sqrt()).abs() < 1e-15);
        assert!((v - 0.271_620).abs() < 1e-6);
        // Normal approximation: z_{0.975} = 1.959963984540054 (SciPy fixture), R = 4 equal
        // standard errors 0.01: 1.96·0.02/4.
        let n = shot_normal(&[0.01; 4], 0.05);
        assert!((n - 1.959_963_984_540_054 * 0.02 / 4.0).abs() < 1e-15);
        assert_eq!(shot_hoeffding(2.0, &[100, 0], 0.05), f64::INFINITY);
    }
}
