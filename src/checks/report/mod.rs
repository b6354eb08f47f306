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
//!
//! The files: this one holds the report's types and the entry points; `plan` the per-run plan
//! that runs the tests of one observable at a time; `steps` one variance test, the Holm
//! correction, the failures and the implied noise scale; `json` the verdict and the report as
//! they appear in the certificate.

mod json;
mod plan;
mod steps;

use crate::bounds::run_bounds::RunBounds;
use crate::model::noise::Redrawn;
use crate::model::{NoiseModel, Run};

pub use plan::CheckPlan;

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
    /// Whether the noise record declares preparation or readout errors (version 2): the text
    /// on failures at t = 0 then says that they exceed the declared ones.
    pub declares_preparation_or_readout: bool,
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
            let device = ob.device.as_ref().map(|d| d.total.as_slice());
            plan.observable_with_variance(o, &ob.mean, &ob.points, sens, None, device)
        })
        .collect();
    plan.finish(observables)
}

#[cfg(test)]
mod tests;
