//! The check as the certificate states it: the verdict, and per observable and time every
//! statistic, p-value and Holm decision, with the failures listed once (docs/certificate.md,
//! `checks` and `verdict`).

use serde_json::{json, Value};

use crate::numbers::num;

use super::*;

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
            if prep > 0 && self.declares_preparation_or_readout {
                text.push_str(&format!(
                    " {prep} of the failures are at t = 0, where no Hamiltonian error has acted: \
                     they point to preparation or readout errors larger than the noise record \
                     declares."
                ));
            } else if prep > 0 {
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
