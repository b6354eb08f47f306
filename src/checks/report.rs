//! The whole consistency check of a run against its noise record (docs/checks.md), its verdict
//! and its JSON.
//!
//! Tests, per observable and recorded time:
//!
//! * **variance** (R ≥ 2): `H0: E s² ≤ V_noise + V_shot`, statistic `X = (R−1)s²/(V_noise +
//!   V_shot)` against χ²_{R−1} (upper tail, normal theory). `V_shot` is maximised over a
//!   Hoeffding interval for the mean that fails with probability `γ`; by the confidence-
//!   interval method for nuisance parameters (Berger and Boos 1994) `p + γ` is a valid
//!   p-value. `γ` is a tenth of the smallest Holm threshold, `γ = 0.1·level/m`. Beside it the
//!   distribution-free p-value of Maurer and Pontil (Theorem 10), also `+ γ`;
//! * **ideal reference** (where the run gives `ideal`): `|v̄ − ideal| ≤ E_avg(ε) + E_shot(ε)`
//!   holds with probability ≥ 1 − ε at the point for every ε; the p-value is the smallest ε
//!   whose interval excludes the ideal value, found by bisection on ln ε with the bounds of
//!   `bounds::global` (global sensitivities: a valid, possibly larger p-value when the
//!   certificate used the light-cone statement).
//!
//! At t = 0 no Hamiltonian error has acted (`V_noise = 0`, `E_avg = 0`), so the same two tests
//! check preparation and measurement: a failure there is reported as such.
//!
//! All χ² variance tests and ideal-reference tests form one family, corrected with Holm's
//! step-down method at the check level; that family decides the verdict. The distribution-
//! free tests form a second Holm family that is reported beside it (docs/checks.md says why).

use serde_json::{json, Value};

use super::chi_square::{chi2_isf, chi2_sf};
use super::columns::{ColumnStats, ShotSum};
use super::holm::holm_adjust;
use super::ideal::HalfWidth;
use super::maurer_pontil;
use super::variance::{bhatia_davis_max, hoeffding_mean_radius, noise_variance};
use crate::bounds::global::{bias_ln_sum, PointBounds, SourceData};
use crate::bounds::run_bounds::RunBounds;
use crate::model::noise::Redrawn;
use crate::model::{NoiseModel, Observable, Run};
use crate::numbers::num;

/// Share of the smallest Holm threshold `level/m` given to the interval for the mean.
const MEAN_INTERVAL_SHARE: f64 = 0.1;

/// Which test failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TestKind {
    /// The spread between realizations exceeds what the record and the shots allow.
    Variance,
    /// The ideal reference lies outside the interval the record implies.
    IdealReference,
}

impl TestKind {
    /// The spelling used in certificates.
    pub fn as_str(self) -> &'static str {
        match self {
            TestKind::Variance => "variance",
            TestKind::IdealReference => "ideal_reference",
        }
    }
}

/// What a failure points to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Category {
    /// A variance failure at t > 0: the record understates the noise.
    NoiseRecord,
    /// A failure at t = 0: preparation or measurement errors, not covered by the bounds.
    PreparationOrMeasurement,
    /// An ideal-reference failure at t > 0: the record understates the noise, or an error
    /// the bounds do not cover (decoherence, leakage, a wrong ideal model) is present.
    IdealReference,
}

impl Category {
    /// The spelling used in certificates.
    pub fn as_str(self) -> &'static str {
        match self {
            Category::NoiseRecord => "noise_record_understated",
            Category::PreparationOrMeasurement => "preparation_or_measurement",
            Category::IdealReference => "outside_certified_interval",
        }
    }
}

/// The variance test at one point.
#[derive(Debug, Clone, PartialEq)]
pub struct VarianceTest {
    /// Mean of the realization values.
    pub mean: f64,
    /// Unbiased sample variance `s²`.
    pub sample_variance: f64,
    /// `V_noise` (Efron–Stein), 0 unless g is redrawn every realization.
    pub v_noise: f64,
    /// `V_shot` (Bhatia–Davis maximised over the interval, or from standard errors).
    pub v_shot: f64,
    /// Whether `V_shot` comes from standard errors (approximate).
    pub shot_approximate: bool,
    /// The interval for the mean over which `V_shot` was maximised (the mean twice when
    /// standard errors were used).
    pub mean_interval: [f64; 2],
    /// `X = (R−1)s²/(V_noise + V_shot)`.
    pub statistic: f64,
    /// `P(χ²_{R−1} > X) + γ`, at most 1.
    pub p_value: f64,
    pub adjusted_p_value: f64,
    pub rejected: bool,
    /// Maurer–Pontil lower confidence bound on the standard deviation at failure probability
    /// equal to the check level (pointwise).
    pub std_lower_distribution_free: f64,
    /// Maurer–Pontil p-value `+ γ`, at most 1.
    pub p_value_distribution_free: f64,
    pub adjusted_p_value_distribution_free: f64,
    pub rejected_distribution_free: bool,
}

/// The ideal-reference test at one point.
#[derive(Debug, Clone, PartialEq)]
pub struct IdealTest {
    pub ideal: f64,
    /// `v̄ − ideal`.
    pub deviation: f64,
    /// The certificate's `E_avg + E_shot` at this point.
    pub half_width: f64,
    /// Whether the ideal value lies inside the certificate's interval.
    pub inside: bool,
    /// The smallest ε whose pointwise interval excludes the ideal value (1 if none).
    pub p_value: f64,
    pub adjusted_p_value: f64,
    pub rejected: bool,
}

/// Both tests at one recorded time.
#[derive(Debug, Clone, PartialEq)]
pub struct PointCheck {
    pub time_index: usize,
    pub time: f64,
    /// `None` with fewer than two realizations.
    pub variance: Option<VarianceTest>,
    /// `None` when the run gives no ideal reference for the observable.
    pub ideal: Option<IdealTest>,
}

/// The implied noise scale of one observable (docs/checks.md).
#[derive(Debug, Clone, PartialEq)]
pub struct ImpliedScale {
    /// The largest over times of the smallest λ ≥ 0 with `λ² V_noise ≥ LCL(s²) − V_shot`,
    /// LCL from χ² at level `level/T` per time (so the maximum holds for all times at once,
    /// under normal theory); `None` when no time has `V_noise > 0`.
    pub value: Option<f64>,
    /// The time index where the maximum is attained.
    pub time_index: Option<usize>,
    /// The same with the Maurer–Pontil lower bound on the standard deviation.
    pub distribution_free: Option<f64>,
    /// The per-time level `level/T` of the lower confidence limits.
    pub per_time_level: Option<f64>,
    /// Why there is no value, if there is none.
    pub reason: Option<String>,
}

/// The checks of one observable.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableChecks {
    pub name: String,
    /// `s_O` of the observable.
    pub spread: f64,
    pub points: Vec<PointCheck>,
    pub implied_scale: ImpliedScale,
    /// Time index of the earliest failed test of this observable (decision family).
    pub earliest_failure: Option<usize>,
}

/// One failed test of the decision family.
#[derive(Debug, Clone, PartialEq)]
pub struct Failure {
    pub observable: String,
    pub time_index: usize,
    pub time: f64,
    pub test: TestKind,
    pub category: Category,
    /// `X` for the variance test; `|v̄ − ideal| / (E_avg + E_shot)` for the ideal test.
    pub statistic: f64,
    pub p_value: f64,
    pub adjusted_p_value: f64,
    /// For a variance failure: whether the distribution-free test rejects too.
    pub distribution_free_rejects: Option<bool>,
}

/// The consistency checks of a run.
#[derive(Debug, Clone, PartialEq)]
pub struct ChecksReport {
    /// The family-wise level of the checks.
    pub check_level: f64,
    /// Number of realizations R.
    pub realizations: usize,
    pub redrawn: Redrawn,
    /// Why the variance tests were not possible, if they were not.
    pub variance_not_possible: Option<String>,
    /// `γ`, the failure probability of the interval for the mean in each variance test.
    pub mean_interval_probability: f64,
    /// Why nothing was tested at all (an unusable check level), if so.
    pub not_performed: Option<String>,
    /// Number of tests in the decision family.
    pub n_tests: usize,
    pub observables: Vec<ObservableChecks>,
    failures: Vec<Failure>,
}

/// Checks `run` against `noise` with the certificate's `bounds`, at family-wise level
/// `check_level` (strictly between 0 and 1), with the global sensitivities `e_i = s_O·t`.
pub fn check_run(
    run: &Run,
    noise: &NoiseModel,
    bounds: &RunBounds,
    check_level: f64,
) -> ChecksReport {
    check_run_with_sensitivities(run, noise, bounds, check_level, None)
}

/// Per-source sensitivities, indexed `[observable][time][source]` (run order, instance order).
pub type Sensitivities = [Vec<Vec<f64>>];

/// [`check_run`] with per-source sensitivities `e_i(t)` for `V_noise` (the light-cone
/// version, docs/method.md §5); `None` means the global `s_O·t`. The ideal-reference p-values use
/// the global bounds either way (valid, possibly conservative).
pub fn check_run_with_sensitivities(
    run: &Run,
    noise: &NoiseModel,
    bounds: &RunBounds,
    check_level: f64,
    sensitivities: Option<&Sensitivities>,
) -> ChecksReport {
    let with_ideal = run.observables.iter().filter(|o| o.ideal.is_some()).count();
    let plan = CheckPlan::new(
        &run.times,
        &bounds.sources,
        noise.redrawn,
        run.n_realizations(),
        run.observables.len(),
        with_ideal,
        check_level,
    );
    let observables = run
        .observables
        .iter()
        .zip(&bounds.observables)
        .enumerate()
        .map(|(j, (o, ob))| {
            let sens = sensitivities.and_then(|s| s.get(j)).map(|v| v.as_slice());
            plan.observable(o, &ob.mean, &ob.points, sens)
        })
        .collect();
    plan.finish(observables)
}

/// The checks of a run, one observable at a time (so a streaming reader needs only one
/// observable's R × T values in memory): [`CheckPlan::new`] with the run's dimensions, then
/// [`CheckPlan::observable`] for each observable in run order, then [`CheckPlan::finish`].
/// The numbers are those of [`check_run`] exactly.
#[derive(Debug, Clone)]
pub struct CheckPlan<'a> {
    times: &'a [f64],
    sources: &'a [SourceData],
    redrawn: Redrawn,
    realizations: usize,
    level: f64,
    gamma: f64,
    n_tests: usize,
    not_performed: Option<String>,
    variance_not_possible: Option<String>,
    /// `Σ_i ln φ(2tδ_i)` per time, the observable-independent part of `E_bias` (empty when no
    /// observable gives an ideal reference).
    bias_ln_sums: Vec<f64>,
}

impl<'a> CheckPlan<'a> {
    /// A plan for `n_observables` observables, `n_with_ideal` of which give an ideal
    /// reference, over `times`, with `realizations` realizations.
    pub fn new(
        times: &'a [f64],
        sources: &'a [SourceData],
        redrawn: Redrawn,
        realizations: usize,
        n_observables: usize,
        n_with_ideal: usize,
        check_level: f64,
    ) -> CheckPlan<'a> {
        let r = realizations;
        let variance_not_possible = match r {
            0 => Some("the run has no realizations".to_string()),
            1 => Some(
                "only one realization: there is no spread between realizations to compare with \
                 the record; record at least two realizations to test it"
                    .to_string(),
            ),
            _ => None,
        };
        let m_var = if r >= 2 {
            times.len() * n_observables
        } else {
            0
        };
        let m_ideal = if r >= 1 {
            n_with_ideal * times.len()
        } else {
            0
        };
        let level_ok = check_level > 0.0 && check_level < 1.0;
        let n_tests = if level_ok { m_var + m_ideal } else { 0 };
        let not_performed = (!level_ok).then(|| {
            format!("the check level {check_level} is not strictly between 0 and 1; give e.g. 0.01")
        });
        let gamma = if n_tests > 0 {
            MEAN_INTERVAL_SHARE * check_level / n_tests as f64
        } else {
            0.0
        };
        let bias_ln_sums = if m_ideal > 0 && not_performed.is_none() {
            times.iter().map(|&t| bias_ln_sum(sources, t)).collect()
        } else {
            Vec::new()
        };
        CheckPlan {
            times,
            sources,
            redrawn,
            realizations,
            level: check_level,
            gamma,
            n_tests,
            not_performed,
            variance_not_possible,
            bias_ln_sums,
        }
    }

    /// The tests of one observable (before Holm), given the certificate's mean and bounds per
    /// time and, optionally, per-time per-source sensitivities.
    pub fn observable(
        &self,
        o: &Observable,
        mean: &[f64],
        points_bounds: &[PointBounds],
        sensitivities: Option<&[Vec<f64>]>,
    ) -> ObservableChecks {
        self.observable_with_variance(o, mean, points_bounds, sensitivities, None)
    }

    /// As [`CheckPlan::observable`], with a second upper bound per time on the Efron–Stein
    /// variance of one draw (`Σ δ_i² σ_i² e_i²` before the realization rule, e.g. the
    /// light-cone one of `bounds::local`): `V_noise` is the smaller of the two. Both bound the
    /// same variance for every admissible record and are fixed before the data are seen, so
    /// their minimum is a valid bound, and the test stays valid (docs/method.md §5).
    pub fn observable_with_variance(
        &self,
        o: &Observable,
        mean: &[f64],
        points_bounds: &[PointBounds],
        sensitivities: Option<&[Vec<f64>]>,
        other_v_noise: Option<&[f64]>,
    ) -> ObservableChecks {
        let r = self.realizations;
        let s_o = o.spread();
        let mut points = Vec::with_capacity(self.times.len());
        if self.not_performed.is_none() {
            // `mean` is the bounds' v̄ (the streamed sums over R): the first pass of the
            // variance, already done.
            let stats = ColumnStats::with_mean(o, Some(mean));
            // The global sensitivities s_O·t, refilled per time (no allocation per point).
            let mut global = Vec::with_capacity(self.sources.len());
            for (k, &t) in self.times.iter().enumerate() {
                global.clear();
                global.resize(self.sources.len(), s_o * t);
                let sens: &[f64] = match sensitivities.and_then(|v| v.get(k)) {
                    Some(e) => e,
                    None => &global,
                };
                let shots = stats.shots.get(k).copied();
                let variance = match shots {
                    Some(shots) if r >= 2 => {
                        let column = Column {
                            mean: stats.mean.get(k).copied().unwrap_or(f64::NAN),
                            variance: stats.variance.get(k).copied().unwrap_or(f64::NAN),
                            rows: stats.rows,
                            shots,
                        };
                        let other = other_v_noise.and_then(|v| v.get(k)).copied();
                        let (redrawn, sources) = (self.redrawn, self.sources);
                        let mut v =
                            variance_test(o, &column, redrawn, sources, sens, other, self.gamma);
                        v.std_lower_distribution_free = maurer_pontil::std_lower_bound(
                            v.sample_variance.sqrt(),
                            r,
                            s_o,
                            self.level,
                        );
                        Some(v)
                    }
                    _ => None,
                };
                let ideal = match (&o.ideal, points_bounds.get(k), mean.get(k), shots) {
                    (Some(ideal), Some(pb), Some(&m), Some(shots)) if r >= 1 => {
                        let deviation = m - ideal[k];
                        let half_width = HalfWidth::new(
                            s_o,
                            self.sources,
                            &global,
                            self.bias_ln_sums.get(k).copied().unwrap_or(f64::NAN),
                            self.redrawn,
                            r,
                            shots,
                        );
                        Some(IdealTest {
                            ideal: ideal[k],
                            deviation,
                            half_width: pb.half_width,
                            inside: deviation.abs() <= pb.half_width,
                            p_value: half_width.p_value(deviation.abs()),
                            adjusted_p_value: 1.0,
                            rejected: false,
                        })
                    }
                    _ => None,
                };
                points.push(PointCheck {
                    time_index: k,
                    time: t,
                    variance,
                    ideal,
                });
            }
        }
        ObservableChecks {
            name: o.name.clone(),
            spread: o.spread(),
            points,
            implied_scale: ImpliedScale {
                value: None,
                time_index: None,
                distribution_free: None,
                per_time_level: None,
                reason: None,
            },
            earliest_failure: None,
        }
    }

    /// Holm over all observables' tests, the failures, the implied scales: the report.
    pub fn finish(self, mut observables: Vec<ObservableChecks>) -> ChecksReport {
        apply_holm(&mut observables, self.level);
        let mut failures = Vec::new();
        for oc in observables.iter_mut() {
            let before = failures.len();
            collect_failures(oc, &mut failures);
            oc.earliest_failure = failures[before..].iter().map(|f| f.time_index).min();
            oc.implied_scale = implied_scale(oc, self.realizations, self.redrawn, self.level);
        }
        ChecksReport {
            check_level: self.level,
            realizations: self.realizations,
            redrawn: self.redrawn,
            variance_not_possible: self.variance_not_possible,
            mean_interval_probability: self.gamma,
            not_performed: self.not_performed,
            n_tests: self.n_tests,
            observables,
            failures,
        }
    }
}

/// One time's column of an observable, summed ([`ColumnStats`]).
struct Column {
    mean: f64,
    variance: f64,
    rows: usize,
    shots: ShotSum,
}

/// The variance test at one time (without the Holm fields and the lower bound).
fn variance_test(
    o: &Observable,
    c: &Column,
    redrawn: Redrawn,
    sources: &[SourceData],
    sens: &[f64],
    other_v_noise: Option<f64>,
    gamma: f64,
) -> VarianceTest {
    let r = c.rows;
    let (mean, var) = (c.mean, c.variance);
    // The smaller of two upper bounds on the same variance (see `observable_with_variance`);
    // `noise_variance` is 0 unless the noise is redrawn every realization, and stays 0.
    let v_noise = noise_variance(redrawn, sources, sens);
    let v_noise = other_v_noise.map_or(v_noise, |x| v_noise.min(x));
    let (v_shot, interval, approximate, gamma_used) = if c.shots.approximate() {
        (c.shots.variance(0.0, r), [mean, mean], true, 0.0)
    } else {
        let radius = hoeffding_mean_radius(o.spread(), r, gamma);
        let interval = [mean - radius, mean + radius];
        let h = bhatia_davis_max(o.spectrum_min, o.spectrum_max, interval[0], interval[1]);
        (c.shots.variance(h, r), interval, false, gamma)
    };
    let allowed = v_noise + v_shot;
    let dof = (r - 1) as f64;
    let statistic = if allowed > 0.0 {
        dof * var / allowed
    } else if var > 0.0 {
        f64::INFINITY
    } else {
        0.0
    };
    let p_chi = if statistic == f64::INFINITY {
        0.0
    } else if allowed == f64::INFINITY {
        1.0
    } else {
        chi2_sf(statistic, dof)
    };
    let p_mp = maurer_pontil::excess_p_value(var.sqrt(), allowed, r, o.spread());
    VarianceTest {
        mean,
        sample_variance: var,
        v_noise,
        v_shot,
        shot_approximate: approximate,
        mean_interval: interval,
        statistic,
        p_value: (p_chi + gamma_used).min(1.0),
        adjusted_p_value: 1.0,
        rejected: false,
        std_lower_distribution_free: 0.0,
        p_value_distribution_free: (p_mp + gamma_used).min(1.0),
        adjusted_p_value_distribution_free: 1.0,
        rejected_distribution_free: false,
    }
}

/// Holm over the decision family (variance χ² and ideal tests, in observable, time, kind
/// order) and, separately, over the distribution-free variance tests.
fn apply_holm(observables: &mut [ObservableChecks], level: f64) {
    let mut p = Vec::new();
    let mut p_mp = Vec::new();
    for oc in observables.iter() {
        for pc in &oc.points {
            if let Some(v) = &pc.variance {
                p.push(v.p_value);
                p_mp.push(v.p_value_distribution_free);
            }
            if let Some(i) = &pc.ideal {
                p.push(i.p_value);
            }
        }
    }
    let adj = holm_adjust(&p);
    let adj_mp = holm_adjust(&p_mp);
    let (mut a, mut b) = (adj.iter(), adj_mp.iter());
    for oc in observables.iter_mut() {
        for pc in &mut oc.points {
            if let Some(v) = &mut pc.variance {
                v.adjusted_p_value = a.next().copied().unwrap_or(1.0);
                v.rejected = v.adjusted_p_value <= level;
                v.adjusted_p_value_distribution_free = b.next().copied().unwrap_or(1.0);
                v.rejected_distribution_free = v.adjusted_p_value_distribution_free <= level;
            }
            if let Some(i) = &mut pc.ideal {
                i.adjusted_p_value = a.next().copied().unwrap_or(1.0);
                i.rejected = i.adjusted_p_value <= level;
            }
        }
    }
}

fn collect_failures(oc: &ObservableChecks, out: &mut Vec<Failure>) {
    for pc in &oc.points {
        let at_zero = pc.time == 0.0;
        if let Some(v) = pc.variance.as_ref().filter(|v| v.rejected) {
            out.push(Failure {
                observable: oc.name.clone(),
                time_index: pc.time_index,
                time: pc.time,
                test: TestKind::Variance,
                category: if at_zero {
                    Category::PreparationOrMeasurement
                } else {
                    Category::NoiseRecord
                },
                statistic: v.statistic,
                p_value: v.p_value,
                adjusted_p_value: v.adjusted_p_value,
                distribution_free_rejects: Some(v.rejected_distribution_free),
            });
        }
        if let Some(i) = pc.ideal.as_ref().filter(|i| i.rejected) {
            out.push(Failure {
                observable: oc.name.clone(),
                time_index: pc.time_index,
                time: pc.time,
                test: TestKind::IdealReference,
                category: if at_zero {
                    Category::PreparationOrMeasurement
                } else {
                    Category::IdealReference
                },
                statistic: if i.half_width > 0.0 {
                    i.deviation.abs() / i.half_width
                } else {
                    f64::INFINITY
                },
                p_value: i.p_value,
                adjusted_p_value: i.adjusted_p_value,
                distribution_free_rejects: None,
            });
        }
    }
}

/// The implied noise scale of one observable (see [`ImpliedScale`]).
fn implied_scale(oc: &ObservableChecks, r: usize, redrawn: Redrawn, level: f64) -> ImpliedScale {
    let none = |reason: &str| ImpliedScale {
        value: None,
        time_index: None,
        distribution_free: None,
        per_time_level: None,
        reason: Some(reason.to_string()),
    };
    if r < 2 {
        return none("only one realization: no spread between realizations to scale against");
    }
    match redrawn {
        Redrawn::EveryShot => {
            return none(
                "the record says the noise is redrawn every shot: it adds no spread between \
                 realizations (V_noise = 0), so the spread cannot measure it",
            )
        }
        Redrawn::Once => {
            return none(
                "the record says the noise is drawn once: the realizations share one draw \
                 (V_noise = 0), so their spread cannot measure it",
            )
        }
        Redrawn::EveryRealization => {}
    }
    let tested: Vec<(usize, &VarianceTest)> = oc
        .points
        .iter()
        .filter_map(|pc| pc.variance.as_ref().map(|v| (pc.time_index, v)))
        .filter(|(_, v)| v.v_noise > 0.0 && v.v_noise.is_finite())
        .collect();
    if tested.is_empty() {
        return none(
            "V_noise = 0 at every recorded time (only t = 0, or no noise amplitude reaches the \
             observable)",
        );
    }
    let beta = level / tested.len() as f64;
    let dof = (r - 1) as f64;
    let crit = chi2_isf(beta, dof);
    let (mut best, mut best_k, mut best_mp) = (0.0f64, tested[0].0, 0.0f64);
    for &(k, v) in &tested {
        let lcl = dof * v.sample_variance / crit;
        let lambda = ((lcl - v.v_shot).max(0.0) / v.v_noise).sqrt();
        if lambda > best {
            best = lambda;
            best_k = k;
        }
        let sd_low = maurer_pontil::std_lower_bound(v.sample_variance.sqrt(), r, oc.spread, beta);
        let lambda_mp = ((sd_low * sd_low - v.v_shot).max(0.0) / v.v_noise).sqrt();
        best_mp = best_mp.max(lambda_mp);
    }
    ImpliedScale {
        value: Some(best),
        time_index: Some(best_k),
        distribution_free: Some(best_mp),
        per_time_level: Some(beta),
        reason: None,
    }
}

impl ChecksReport {
    /// Whether no test of the decision family failed (also true when nothing could be tested;
    /// [`ChecksReport::verdict_json`] then says `not_tested`).
    pub fn consistent(&self) -> bool {
        self.failures.is_empty()
    }

    /// Every failed test of the decision family, in observable, time, kind order.
    pub fn failures(&self) -> &[Failure] {
        &self.failures
    }

    /// Failures at t = 0 (preparation or measurement problems).
    pub fn preparation_failures(&self) -> usize {
        self.failures
            .iter()
            .filter(|f| f.category == Category::PreparationOrMeasurement)
            .count()
    }

    /// The verdict for the certificate body.
    pub fn verdict_json(&self) -> Value {
        let level = self.check_level;
        let (status, text) = if let Some(why) = &self.not_performed {
            (
                "not_tested",
                format!("The consistency checks were not performed: {why}."),
            )
        } else if self.n_tests == 0 {
            (
                "not_tested",
                "Nothing could be tested: the run has one realization and no ideal reference, \
                 so the data cannot contradict the noise record."
                    .to_string(),
            )
        } else if self.failures.is_empty() {
            (
                "consistent",
                format!(
                    "No test of the data against the noise record failed at family-wise level \
                     {level} (Holm, {} tests).",
                    self.n_tests
                ),
            )
        } else {
            let mut text = format!(
                "The data contradict the noise record: {} of {} tests failed at family-wise \
                 level {level} (Holm); the bounds rest on a record that the data do not support.",
                self.failures.len(),
                self.n_tests
            );
            let prep = self.preparation_failures();
            if prep > 0 {
                text.push_str(&format!(
                    " {prep} of the failures are at t = 0, where no Hamiltonian error has acted: \
                     they point to preparation or measurement errors, which the bounds do not \
                     cover."
                ));
            }
            ("inconsistent", text)
        };
        object([
            ("status", json!(status)),
            ("check_level", num(level)),
            ("tests", json!(self.n_tests)),
            ("failed_tests", json!(self.failures.len())),
            ("failed_at_time_zero", json!(self.preparation_failures())),
            ("text", Value::String(text)),
        ])
    }

    /// Every statistic of the checks, for the certificate body.
    pub fn to_json(&self) -> Value {
        if let Some(why) = &self.not_performed {
            return json!({ "status": "not_performed", "reason": why });
        }
        let variance = match &self.variance_not_possible {
            Some(why) => json!({ "status": "not_possible", "reason": why }),
            None => json!({
                "status": "performed",
                "statistic": "(R - 1) s^2 / (v_noise + v_shot) against chi-square with R - 1 \
                              degrees of freedom (upper tail; assumes normal realization values)",
                "degrees_of_freedom": self.realizations.saturating_sub(1),
                "v_noise": "Efron-Stein: sum over sources of (delta sigma e)^2, e = s_O t, \
                            or the light-cone e = s_O T(t) where that sum is smaller; \
                            0 unless the noise is redrawn every realization",
                "v_shot": "Bhatia-Davis: max over the mean interval of (max - x)(x - min), \
                           times the mean of 1/shots",
                "mean_interval_failure_probability": num(self.mean_interval_probability),
                "p_value": "chi-square upper tail + mean_interval_failure_probability",
                "distribution_free": "Maurer and Pontil (2009), Theorem 10: reported beside, \
                                      Holm-corrected as a family of its own, not deciding",
            }),
        };
        object([
            ("status", json!("performed")),
            ("check_level", num(self.check_level)),
            ("realizations", json!(self.realizations)),
            ("redrawn", json!(self.redrawn.as_str())),
            ("tests", json!(self.n_tests)),
            (
                "correction",
                json!("holm step-down over all variance and ideal-reference tests"),
            ),
            (
                "decides_verdict",
                json!("the chi-square variance tests and the ideal-reference tests"),
            ),
            ("variance", variance),
            (
                "observables",
                Value::Array(self.observables.iter().map(observable_json).collect()),
            ),
            ("failures", failures_json(&self.failures)),
        ])
    }
}

/// A JSON object from its members, moved in. (`json!` would copy every `Value` placed in it,
/// which for the per-point arrays of a large run doubled the peak memory of the body.)
fn object<const N: usize>(members: [(&str, Value); N]) -> Value {
    Value::Object(
        members
            .into_iter()
            .map(|(k, v)| (k.to_string(), v))
            .collect(),
    )
}

fn column<T>(points: &[PointCheck], f: impl Fn(&PointCheck) -> Option<T>) -> Vec<T> {
    points.iter().filter_map(f).collect()
}

fn nums(v: Vec<f64>) -> Value {
    Value::Array(v.into_iter().map(num).collect())
}

fn observable_json(oc: &ObservableChecks) -> Value {
    let pts = &oc.points;
    let variance = if pts.iter().all(|p| p.variance.is_some()) && !pts.is_empty() {
        let v = |f: fn(&VarianceTest) -> f64| nums(column(pts, |p| p.variance.as_ref().map(f)));
        let b = |f: fn(&VarianceTest) -> bool| json!(column(pts, |p| p.variance.as_ref().map(f)));
        let approximate = pts
            .iter()
            .any(|p| p.variance.as_ref().is_some_and(|x| x.shot_approximate));
        object([
            ("sample_mean", v(|x| x.mean)),
            ("sample_variance", v(|x| x.sample_variance)),
            ("v_noise", v(|x| x.v_noise)),
            ("v_shot", v(|x| x.v_shot)),
            ("v_shot_approximate", Value::Bool(approximate)),
            ("mean_interval_low", v(|x| x.mean_interval[0])),
            ("mean_interval_high", v(|x| x.mean_interval[1])),
            ("chi_square_statistic", v(|x| x.statistic)),
            ("p_value", v(|x| x.p_value)),
            ("adjusted_p_value", v(|x| x.adjusted_p_value)),
            ("rejected", b(|x| x.rejected)),
            (
                "std_lower_distribution_free",
                v(|x| x.std_lower_distribution_free),
            ),
            (
                "p_value_distribution_free",
                v(|x| x.p_value_distribution_free),
            ),
            (
                "adjusted_p_value_distribution_free",
                v(|x| x.adjusted_p_value_distribution_free),
            ),
            (
                "rejected_distribution_free",
                b(|x| x.rejected_distribution_free),
            ),
        ])
    } else {
        json!({ "status": "not_possible" })
    };
    let ideal = if pts.iter().all(|p| p.ideal.is_some()) && !pts.is_empty() {
        let v = |f: fn(&IdealTest) -> f64| nums(column(pts, |p| p.ideal.as_ref().map(f)));
        let b = |f: fn(&IdealTest) -> bool| json!(column(pts, |p| p.ideal.as_ref().map(f)));
        object([
            ("ideal", v(|x| x.ideal)),
            ("deviation", v(|x| x.deviation)),
            ("half_width", v(|x| x.half_width)),
            ("inside_interval", b(|x| x.inside)),
            ("p_value", v(|x| x.p_value)),
            ("adjusted_p_value", v(|x| x.adjusted_p_value)),
            ("rejected", b(|x| x.rejected)),
        ])
    } else {
        Value::Null
    };
    let zero: Vec<usize> = pts
        .iter()
        .filter(|p| p.time == 0.0)
        .map(|p| p.time_index)
        .collect();
    let t0 = if zero.is_empty() {
        json!({ "status": "no_time_zero", "reason": "the run records no time t = 0" })
    } else {
        let rejected = pts.iter().filter(|p| p.time == 0.0).any(|p| {
            p.variance.as_ref().is_some_and(|v| v.rejected)
                || p.ideal.as_ref().is_some_and(|i| i.rejected)
        });
        json!({
            "status": "checked",
            "time_indices": zero,
            "variance_tested": pts.iter().any(|p| p.time == 0.0 && p.variance.is_some()),
            "offset_tested": pts.iter().any(|p| p.time == 0.0 && p.ideal.is_some()),
            "rejected": rejected,
        })
    };
    let s = &oc.implied_scale;
    let implied = json!({
        "value": s.value.map(num),
        "time_index": s.time_index,
        "time": s.time_index.and_then(|k| pts.get(k)).map(|p| num(p.time)),
        "distribution_free": s.distribution_free.map(num),
        "per_time_level": s.per_time_level.map(num),
        "reason": s.reason,
    });
    let earliest = oc
        .earliest_failure
        .and_then(|k| pts.get(k))
        .map(|p| json!({ "time_index": p.time_index, "time": num(p.time) }));
    object([
        ("name", json!(oc.name)),
        ("variance", variance),
        ("ideal_reference", ideal),
        ("t0", t0),
        ("implied_noise_scale", implied),
        ("earliest_failure", earliest.unwrap_or(Value::Null)),
    ])
}

/// The failed tests, grouped: one entry per observable, test and category, with the time
/// indices that failed, in observable order, then variance before ideal reference, then t = 0
/// before t > 0. The statistics and p-values of every point are in `checks.observables`, so
/// they are not repeated here: a run whose every point fails would otherwise carry its
/// statistics twice (tens of megabytes for T × K = 32 000 points).
fn failures_json(failures: &[Failure]) -> Value {
    const ORDER: [(TestKind, Category); 4] = [
        (TestKind::Variance, Category::PreparationOrMeasurement),
        (TestKind::Variance, Category::NoiseRecord),
        (TestKind::IdealReference, Category::PreparationOrMeasurement),
        (TestKind::IdealReference, Category::IdealReference),
    ];
    let mut out = Vec::new();
    // Failures come in observable order; one observable's failures are contiguous.
    for group in failures.chunk_by(|a, b| a.observable == b.observable) {
        for (test, category) in ORDER {
            let indices: Vec<Value> = group
                .iter()
                .filter(|f| f.test == test && f.category == category)
                .map(|f| json!(f.time_index))
                .collect();
            if !indices.is_empty() {
                out.push(object([
                    ("observable", json!(group[0].observable)),
                    ("test", json!(test.as_str())),
                    ("category", json!(category.as_str())),
                    ("time_indices", Value::Array(indices)),
                ]));
            }
        }
    }
    Value::Array(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bounds::confidence::Simultaneity;
    use crate::bounds::run_bounds::evaluate_run;
    use crate::model::{
        Boundary, Family, FrequencyUnit, Geometry, Hamiltonian, Instance, Lattice, Shots, TimeUnit,
    };
    use ndarray::Array2;
    use rand::{Rng, SeedableRng};

    const TIMES: [f64; 4] = [0.0, 0.5, 1.0, 2.0];

    fn observable(
        name: &str,
        values: Array2<f64>,
        shots: u64,
        ideal: Option<Vec<f64>>,
    ) -> Observable {
        Observable {
            name: name.into(),
            values,
            shots: Shots::Uniform(shots),
            stderr: None,
            ideal,
            support: vec![0],
            spectrum_min: -1.0,
            spectrum_max: 1.0,
            description: None,
            terms: None,
        }
    }

    fn run(observables: Vec<Observable>) -> Run {
        Run {
            run_id: "invented-ramsey-check".into(),
            time_unit: TimeUnit::Us,
            description: Some("invented scenario for the consistency checks".into()),
            times: TIMES.to_vec(),
            lattice: Lattice::regular(Geometry::Chain, &[1], Boundary::Open).unwrap(),
            hamiltonian: Hamiltonian {
                energy_unit: FrequencyUnit::RadPerUs,
                bond_norm_max: 0.0,
                bond_norms: None,
                interaction_range: 1,
            },
            observables,
        }
    }

    fn record(delta: f64, redrawn: Redrawn) -> NoiseModel {
        NoiseModel {
            redrawn,
            instances: vec![Instance {
                source: 0,
                support: vec![0],
                bond: None,
                delta,
                family: Family::Uniform,
                mean_offset: 0.0,
                mean_offset_uncertainty: 0.0,
            }],
        }
    }

    /// An exact simulation of the one-spin Ramsey scenario of docs/method.md §3 (H = 0, |+⟩, one
    /// source δ g Z with g uniform on [−1, 1] redrawn every realization): ⟨X⟩ = cos(2δgt),
    /// ⟨Y⟩ = sin(2δgt) in closed form, and each shot is ±1 with P(+1) = (1 + ⟨O⟩)/2.
    fn simulate(delta_true: f64, r: usize, shots: u64, seed: u64) -> Run {
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(seed);
        let mut x = Array2::zeros((r, TIMES.len()));
        let mut y = Array2::zeros((r, TIMES.len()));
        for i in 0..r {
            let g: f64 = rng.random_range(-1.0..=1.0);
            for (k, &t) in TIMES.iter().enumerate() {
                let phase = 2.0 * delta_true * g * t;
                for (a, mean) in [(&mut x, phase.cos()), (&mut y, phase.sin())] {
                    let mut sum = 0i64;
                    for _ in 0..shots {
                        sum += if rng.random::<f64>() < 0.5 * (1.0 + mean) {
                            1
                        } else {
                            -1
                        };
                    }
                    a[[i, k]] = sum as f64 / shots as f64;
                }
            }
        }
        let ideal_x = Some(vec![1.0; TIMES.len()]);
        let ideal_y = Some(vec![0.0; TIMES.len()]);
        run(vec![
            observable("X", x, shots, ideal_x),
            observable("Y", y, shots, ideal_y),
        ])
    }

    fn check(run: &Run, noise: &NoiseModel) -> ChecksReport {
        let bounds = evaluate_run(run, noise, 0.95, Simultaneity::Simultaneous).unwrap();
        check_run(run, noise, &bounds, 0.01)
    }

    /// Values with a sample variance exactly equal to V_noise + V_shot (±a around 0, with
    /// a² = (R−1)/R·allowed) give X = R − 1, the χ² median region: every test passes.
    #[test]
    fn data_with_exactly_the_allowed_variance_pass() {
        let (r, shots, delta) = (50usize, 100u64, 0.05);
        let noise = record(delta, Redrawn::EveryRealization);
        let mut values = Array2::zeros((r, TIMES.len()));
        for (k, &t) in TIMES.iter().enumerate() {
            // V_noise = δ²σ²(s_O t)² with σ² = 1/3, s_O = 2; the interval for the mean 0
            // contains the midpoint of [−1, 1], so V_shot = 1·(1/S).
            let allowed = delta * delta / 3.0 * (2.0 * t) * (2.0 * t) + 1.0 / shots as f64;
            let a = ((r - 1) as f64 / r as f64 * allowed).sqrt();
            for i in 0..r {
                values[[i, k]] = if i % 2 == 0 { a } else { -a };
            }
        }
        let run = run(vec![observable("Y", values, shots, None)]);
        let rep = check(&run, &noise);
        assert!(rep.consistent(), "{:?}", rep.failures());
        assert_eq!(rep.n_tests, TIMES.len());
        for pc in &rep.observables[0].points {
            let v = pc.variance.as_ref().unwrap();
            assert!(
                (v.statistic - (r - 1) as f64).abs() < 1e-9,
                "{}",
                v.statistic
            );
            assert!(v.p_value > 0.4 && v.p_value < 0.6);
        }
        assert_eq!(rep.verdict_json()["status"], "consistent");
        // V_noise > 0 at t > 0, and the data show just the allowed spread: the implied scale
        // is below 1.
        let s = rep.observables[0].implied_scale.value.unwrap();
        assert!(s < 1.0, "{s}");
    }

    /// The exact simulation under the recorded noise passes; with 20 times the recorded
    /// amplitude the variance tests fail at every t > 0 (and the distribution-free test
    /// agrees), the t = 0 tests do not, and the implied scale is well above 1.
    #[test]
    fn the_exact_simulation_passes_and_twenty_times_the_noise_fails() {
        let noise = record(0.05, Redrawn::EveryRealization);
        let ok = check(&simulate(0.05, 200, 100, 11), &noise);
        assert!(ok.consistent(), "{:?}", ok.failures());
        assert_eq!(ok.n_tests, 2 * 2 * TIMES.len());

        let bad = check(&simulate(1.0, 200, 100, 12), &noise);
        assert!(!bad.consistent());
        let variance: Vec<&Failure> = bad
            .failures()
            .iter()
            .filter(|f| f.test == TestKind::Variance)
            .collect();
        for name in ["X", "Y"] {
            let times: Vec<usize> = variance
                .iter()
                .filter(|f| f.observable == name)
                .map(|f| f.time_index)
                .collect();
            assert_eq!(times, [1, 2, 3], "{name}");
        }
        assert!(variance.iter().all(|f| f.category == Category::NoiseRecord));
        // The distribution-free test has much less power: in this seeded run it confirms two
        // of the six variance failures (X at t = 2, Y at t = 1), not the others.
        let confirmed = variance
            .iter()
            .filter(|f| f.distribution_free_rejects == Some(true))
            .count();
        assert!(variance
            .iter()
            .all(|f| f.distribution_free_rejects.is_some()));
        assert!(confirmed >= 1 && confirmed < variance.len(), "{confirmed}");
        assert!(bad.failures().iter().all(|f| f.time > 0.0));
        // ⟨X⟩ averages to sin(2t)/(2t), far from the ideal 1 for t ≥ 1.
        assert!(bad
            .failures()
            .iter()
            .any(|f| f.observable == "X" && f.test == TestKind::IdealReference));
        for oc in &bad.observables {
            assert_eq!(oc.earliest_failure, Some(1));
            assert!(
                oc.implied_scale.value.unwrap() > 5.0,
                "{:?}",
                oc.implied_scale
            );
        }
        let v = bad.verdict_json();
        assert_eq!(v["status"], "inconsistent");
        assert_eq!(v["failed_tests"], bad.failures().len());
        assert_eq!(v["failed_at_time_zero"], 0);
        // The grouped list names every failure once, and each named point's adjusted p-value
        // (kept in `observables`) is at most the level.
        let all = bad.to_json();
        let groups = all["failures"].as_array().unwrap();
        let mut named = 0;
        for g in groups {
            let k = all["observables"]
                .as_array()
                .unwrap()
                .iter()
                .position(|o| o["name"] == g["observable"])
                .unwrap();
            let test = g["test"].as_str().unwrap();
            let p = &all["observables"][k][test]["adjusted_p_value"];
            for i in g["time_indices"].as_array().unwrap() {
                let i = i.as_u64().unwrap() as usize;
                assert!(p[i].as_f64().unwrap() <= 0.01, "{g}");
                named += 1;
            }
        }
        assert_eq!(named, bad.failures().len());
    }

    /// One realization: the variance tests are reported as not possible, with the reason;
    /// the ideal check still runs.
    #[test]
    fn one_realization_makes_the_variance_checks_not_possible() {
        let noise = record(0.05, Redrawn::EveryRealization);
        let rep = check(&simulate(0.05, 1, 100, 3), &noise);
        assert!(rep
            .variance_not_possible
            .as_deref()
            .unwrap()
            .contains("one realization"));
        assert!(rep
            .observables
            .iter()
            .all(|o| o.points.iter().all(|p| p.variance.is_none())));
        assert_eq!(rep.n_tests, 2 * TIMES.len());
        let j = rep.to_json();
        assert_eq!(j["variance"]["status"], "not_possible");
        assert!(j["observables"][0]["implied_noise_scale"]["value"].is_null());
        assert!(j["observables"][0]["implied_noise_scale"]["reason"]
            .as_str()
            .unwrap()
            .contains("one realization"));
    }

    /// An offset at t = 0 (a preparation error) is caught by the ideal check there and
    /// reported as a preparation or measurement problem.
    #[test]
    fn an_offset_at_time_zero_is_a_preparation_problem() {
        let noise = record(0.05, Redrawn::EveryRealization);
        let mut run = simulate(0.05, 100, 100, 5);
        for v in run.observables[0].values.column_mut(0).iter_mut() {
            *v -= 0.3; // ⟨X⟩ = 0.7 at t = 0 instead of 1
        }
        let rep = check(&run, &noise);
        let f = rep.failures();
        assert_eq!(f.len(), 1, "{f:?}");
        assert_eq!((f[0].time_index, f[0].test), (0, TestKind::IdealReference));
        assert_eq!(f[0].category, Category::PreparationOrMeasurement);
        assert_eq!(rep.preparation_failures(), 1);
        assert!(rep.verdict_json()["text"]
            .as_str()
            .unwrap()
            .contains("preparation"));
        assert_eq!(rep.to_json()["observables"][0]["t0"]["rejected"], true);
    }

    /// With the noise redrawn every shot or once, V_noise = 0 and the implied scale is null
    /// with a reason; the record is still tested against the shot noise.
    #[test]
    fn no_noise_variance_without_redraws_between_realizations() {
        for redrawn in [Redrawn::EveryShot, Redrawn::Once] {
            let noise = record(0.05, redrawn);
            let rep = check(&simulate(0.0, 60, 100, 8), &noise);
            assert!(rep.consistent(), "{redrawn:?}: {:?}", rep.failures());
            for oc in &rep.observables {
                assert!(oc
                    .points
                    .iter()
                    .all(|p| p.variance.as_ref().unwrap().v_noise == 0.0));
                assert!(oc.implied_scale.value.is_none() && oc.implied_scale.reason.is_some());
            }
        }
    }

    /// The ideal-reference p-value is the ε at which the interval just excludes the ideal:
    /// the half-width there, from a full `evaluate_point` (pointwise, ε split in halves),
    /// equals the deviation. The mean is placed at half the ε = 1e-6 half-width from the
    /// ideal at every time, t = 0 included.
    #[test]
    fn the_ideal_p_value_is_where_the_interval_reaches_the_deviation() {
        use crate::bounds::global::{evaluate_point, PointInputs, ShotData};
        let noise = record(0.05, Redrawn::EveryRealization);
        let run = simulate(0.05, 20, 100, 9);
        let bounds = evaluate_run(&run, &noise, 0.95, Simultaneity::Simultaneous).unwrap();
        let o = &run.observables[0];
        let shots = vec![100u64; 20];
        let full = |t: f64, eps: f64| {
            evaluate_point(&PointInputs {
                s_o: 2.0,
                t,
                sources: &bounds.sources,
                sensitivities: None,
                redrawn: Redrawn::EveryRealization,
                realizations: 20,
                shots: ShotData::Counts(&shots),
                p: 0.5 * eps,
                alpha: 0.5 * eps,
                p_single: eps,
            })
            .half_width
        };
        let ideal = o.ideal.as_ref().unwrap();
        let mean: Vec<f64> = TIMES
            .iter()
            .zip(ideal)
            .map(|(&t, &i)| i - 0.5 * full(t, 1e-6))
            .collect();
        let plan = CheckPlan::new(&run.times, &bounds.sources, noise.redrawn, 20, 1, 1, 0.01);
        let oc = plan.observable(o, &mean, &bounds.observables[0].points, None);
        for (pc, &t) in oc.points.iter().zip(&TIMES) {
            let test = pc.ideal.as_ref().unwrap();
            let (p, dev) = (test.p_value, test.deviation.abs());
            assert!(p > 1e-6 && p < 1.0, "t={t}: {p}");
            assert!((full(t, p) / dev - 1.0).abs() < 1e-6, "t={t}");
            assert!(dev > full(t, p), "t={t}: p must be on the rejecting side");
        }
        let inside = plan.observable(o, ideal, &bounds.observables[0].points, None);
        assert!(inside
            .points
            .iter()
            .all(|pc| pc.ideal.as_ref().unwrap().p_value == 1.0));
    }

    #[test]
    fn an_unusable_level_is_reported_not_silently_passed() {
        let noise = record(0.05, Redrawn::EveryRealization);
        let run = simulate(0.05, 5, 10, 1);
        let bounds = evaluate_run(&run, &noise, 0.95, Simultaneity::Simultaneous).unwrap();
        let rep = check_run(&run, &noise, &bounds, 1.5);
        assert!(rep.not_performed.is_some());
        assert_eq!(rep.verdict_json()["status"], "not_tested");
        assert_eq!(rep.to_json()["status"], "not_performed");
    }
}
