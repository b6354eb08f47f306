//! The steps of the check: one variance test at one point (χ² and Maurer–Pontil, each `+ γ`),
//! Holm's step-down correction over a family, the list of failures, and the implied noise
//! scale of one observable (docs/checks.md §2, §5 and §7).

use crate::bounds::global::SourceData;
use crate::checks::chi_square::{chi2_isf, chi2_sf};
use crate::checks::columns::ShotSum;
use crate::checks::holm::holm_adjust;
use crate::checks::maurer_pontil;
use crate::checks::variance::{bhatia_davis_max, hoeffding_mean_radius, noise_variance};
use crate::model::noise::Redrawn;
use crate::model::Observable;

use super::*;

/// One time's column of an observable, summed ([`ColumnStats`]).
pub(super) struct Column {
    pub(super) mean: f64,
    pub(super) variance: f64,
    pub(super) rows: usize,
    pub(super) shots: ShotSum,
}

/// What the variance test allows beyond the global Efron–Stein sum at one time: a second upper
/// bound of the same variance (light cone), and the device-error term (docs/method.md §7.5).
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct Allowance {
    pub(super) other_v_noise: Option<f64>,
    pub(super) device: Option<f64>,
}

/// The variance test at one time (without the Holm fields and the lower bound).
pub(super) fn variance_test(
    o: &Observable,
    c: &Column,
    redrawn: Redrawn,
    sources: &[SourceData],
    sens: &[f64],
    allowance: Allowance,
    gamma: f64,
) -> VarianceTest {
    let Allowance {
        other_v_noise,
        device,
    } = allowance;
    let r = c.rows;
    let (mean, var) = (c.mean, c.variance);
    // The smaller of two upper bounds on the same variance (see `observable_with_variance`);
    // `noise_variance` is 0 unless the noise is redrawn every realization, and stays 0.
    let v_noise = noise_variance(redrawn, sources, sens);
    let v_noise = other_v_noise.map_or(v_noise, |x| v_noise.min(x));
    // Device errors (docs/method.md §7.5): each realization's expectation moves by at most
    // E_device from the closed evolution's, so its standard deviation grows by at most
    // E_device (Minkowski), whatever the noise redrawing and even if the device errors differ
    // between realizations within the record's bounds.
    let v_noise = match device {
        Some(d) => {
            let s = v_noise.sqrt() + d;
            s * s
        }
        None => v_noise,
    };
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
pub(super) fn apply_holm(observables: &mut [ObservableChecks], level: f64) {
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

pub(super) fn collect_failures(oc: &ObservableChecks, out: &mut Vec<Failure>) {
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
pub(super) fn implied_scale(
    oc: &ObservableChecks,
    r: usize,
    redrawn: Redrawn,
    level: f64,
) -> ImpliedScale {
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
