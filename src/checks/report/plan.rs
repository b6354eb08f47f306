//! The plan of a run's check: what every observable's tests need (levels, the noise model,
//! the sensitivities), computed once, then the tests of one observable at a time so that a
//! streaming reader can drop its data, and the Holm correction over all of them at the end.

use crate::bounds::global::{bias_ln_sum, fluctuation_sensitivities, PointBounds, SourceData};
use crate::checks::columns::ColumnStats;
use crate::checks::ideal::HalfWidth;
use crate::checks::maurer_pontil;
use crate::model::noise::Redrawn;
use crate::model::Observable;

use super::steps::{apply_holm, collect_failures, implied_scale, variance_test, Allowance, Column};
use super::*;

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
        self.observable_with_variance(o, mean, points_bounds, sensitivities, None, None)
    }

    /// As [`CheckPlan::observable`], with a second upper bound per time on the Efron–Stein
    /// variance of one draw (`Σ δ_i² σ_i² e_i²` before the realization rule, e.g. the
    /// light-cone one of `bounds::local`): `V_noise` is the smaller of the two. Both bound the
    /// same variance for every admissible record and are fixed before the data are seen, so
    /// their minimum is a valid bound, and the test stays valid (docs/method.md §5).
    ///
    /// `device`, per time, is the observable's device-error term (docs/method.md §7.5): the
    /// ideal-reference test adds it to `E_avg` as the bounds do, and the variance test allows
    /// `(√V_noise + E_device)²` for the spread of the realizations' expectations.
    pub fn observable_with_variance(
        &self,
        o: &Observable,
        mean: &[f64],
        points_bounds: &[PointBounds],
        sensitivities: Option<&[Vec<f64>]>,
        other_v_noise: Option<&[f64]>,
        device: Option<&[f64]>,
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
                let linear: &[f64] = match sensitivities.and_then(|v| v.get(k)) {
                    Some(e) => e,
                    None => &global,
                };
                // V_noise is a sum of squares: windowed sources take their fluctuation
                // sensitivities (docs/method.md §3, "Windows").
                let sens = &*fluctuation_sensitivities(self.sources, linear, s_o, t);
                let shots = stats.shots.get(k).copied();
                let variance = match shots {
                    Some(shots) if r >= 2 => {
                        let column = Column {
                            mean: stats.mean.get(k).copied().unwrap_or(f64::NAN),
                            variance: stats.variance.get(k).copied().unwrap_or(f64::NAN),
                            rows: stats.rows,
                            shots,
                        };
                        let allowance = Allowance {
                            other_v_noise: other_v_noise.and_then(|v| v.get(k)).copied(),
                            device: device.and_then(|v| v.get(k)).copied(),
                        };
                        let (redrawn, sources) = (self.redrawn, self.sources);
                        let mut v = variance_test(
                            o, &column, redrawn, sources, sens, allowance, self.gamma,
                        );
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
                            t,
                            self.sources,
                            &global,
                            self.bias_ln_sums.get(k).copied().unwrap_or(f64::NAN),
                            self.redrawn,
                            r,
                            shots,
                        )
                        .with_device(device.and_then(|v| v.get(k)).copied());
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
            declares_preparation_or_readout: false,
            failures,
        }
    }
}
