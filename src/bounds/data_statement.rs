//! The data statement (docs/method.md §6): an interval for the ideal value built from the
//! realizations themselves, beside the model statement of §3 and §5.
//!
//! At one (time, observable) point the `R` recorded values `x_r` lie in the observable's
//! spectrum `[a, b]`. When the noise is redrawn every realization or every shot they are
//! independent with the common mean `μ = E f(μ + g)` (the shot averages are unbiased), so a
//! confidence interval `[L, U]` for a bounded mean ([`super::data_interval`]) covers `μ`, and
//! `|μ − f_ideal| ≤ min(s_O, E_wc, E_sys + E_bias)` holds with certainty: the ideal value lies
//! in `[L − E_det, U + E_det]`. When the noise is drawn once, the values share one draw `g`:
//! `[L, U]` covers `f(g)`, and `|f(g) − f_ideal| ≤ E_avg` on the model statement's own
//! fluctuation event (already paid for by the model's share of ε), so the added term is the
//! model's `E_avg`.
//!
//! The user's ε is split before any data are read: `ε_d = S·ε` to the data statement (all of
//! it to the interval from the data), `ε_m = ε − ε_d` to the model statement, which keeps its
//! own split of §3. The certified interval is the intersection of the two; the union bound
//! makes it hold with probability at least `1 − ε`.
//!
//! Pure: no I/O; the order of operations is fixed (realizations in recorded order), so the
//! numbers reproduce to the bit.

use ndarray::ArrayView2;
use rayon::prelude::*;

use super::confidence::Simultaneity;
use super::data_interval::{
    betting_interval, clopper_pearson, empirical_bernstein_columns, empirical_bernstein_interval,
    map_back, MeanMethod,
};
use super::global::{cap, PointBounds};
use super::local::LocalTerms;
use crate::model::noise::Redrawn;
use crate::model::{outcome_count, Shots};

/// The largest number of recorded values (`R·T·K` over the run) for which the betting
/// interval is computed at every point; above it the closed-form empirical-Bernstein interval
/// is used at every point (the betting interval needs a root search of `O(R)` steps per point).
pub const BETTING_BUDGET: usize = 1 << 21;

/// The default share of ε given to the data statement.
pub const DEFAULT_DATA_SHARE: f64 = 0.5;

/// Why a data share cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ShareError {
    #[error(
        "the data share {0} is not in [0, 1): give e.g. 0.5 (half of the failure probability \
         to the interval from the data) or 0 (the model statement alone)"
    )]
    OutOfRange(f64),
}

/// How ε is divided between the model and the data statements.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shares {
    /// The user's `ε = 1 − confidence`.
    pub epsilon: f64,
    /// The share `S` given to the data statement.
    pub share: f64,
    /// The model statement's confidence level `1 − ε_m`.
    pub model_confidence: f64,
    /// `ε_m`, the model statement's failure probability (all points together).
    pub model_epsilon: f64,
    /// `ε_d`, the data statement's failure probability (all points together).
    pub data_epsilon: f64,
}

/// The largest double below a positive finite `x` (used to round a probability down).
fn next_below(x: f64) -> f64 {
    if x > 0.0 && x.is_finite() {
        f64::from_bits(x.to_bits() - 1)
    } else {
        x
    }
}

/// Splits `ε = 1 − confidence`: `S·ε` to the data statement, the rest to the model.
///
/// `ε_m = 1 − (1 − (1 − S)ε)` is formed exactly from the model's confidence level (Sterbenz:
/// the level is at least 1/2), and `ε_d = ε − ε_m` is rounded down, so `ε_m + ε_d ≤ ε` holds
/// for the real numbers, not only for the doubles.
pub fn shares(confidence: f64, share: f64) -> Result<Shares, ShareError> {
    if share.is_nan() || !(0.0..1.0).contains(&share) {
        return Err(ShareError::OutOfRange(share));
    }
    let epsilon = 1.0 - confidence;
    let model_confidence = if share == 0.0 {
        confidence
    } else {
        1.0 - epsilon * (1.0 - share)
    };
    let model_epsilon = 1.0 - model_confidence;
    let data_epsilon = if share == 0.0 {
        0.0
    } else {
        next_below((epsilon - model_epsilon).max(0.0))
    };
    Ok(Shares {
        epsilon,
        share,
        model_confidence,
        model_epsilon,
        data_epsilon,
    })
}

/// Which interval for the mean is used, for the whole run (fixed by its shape, before the
/// values are read).
pub fn method_for(realizations: usize, times: usize, observables: usize) -> MeanMethod {
    let values = realizations
        .saturating_mul(times)
        .saturating_mul(observables);
    if values <= BETTING_BUDGET {
        MeanMethod::Betting
    } else {
        MeanMethod::EmpiricalBernstein
    }
}

/// The failure probability per point of the interval from the data: `ε_d/(T·K)` when the
/// statement is simultaneous (Bonferroni, as for the model statement), else `ε_d`.
pub fn alpha_per_point(data_epsilon: f64, points: usize, simultaneity: Simultaneity) -> f64 {
    match simultaneity {
        Simultaneity::Simultaneous => data_epsilon / points.max(1) as f64,
        Simultaneity::Pointwise => data_epsilon,
    }
}

/// Whether a data statement can narrow anything for runs of `realizations` values per point
/// at failure probability `alpha_point`: its interval for the mean on the most favourable
/// data there are (every value at the middle of the range, no spread) must be narrower than
/// the whole range. Decided from the run's shape alone, before any value is read; where it
/// is false (for instance with one realization) the model statement keeps all of ε.
pub fn can_narrow(realizations: usize, alpha_point: f64, method: MeanMethod) -> bool {
    if realizations < 2 || alpha_point.is_nan() || alpha_point <= 0.0 {
        return false;
    }
    let flat = vec![0.5; realizations];
    let [lo, hi] = match method {
        MeanMethod::EmpiricalBernstein => {
            empirical_bernstein_interval(&flat, 0.0, 1.0, alpha_point)
        }
        _ => betting_interval(&flat, 0.0, 1.0, alpha_point),
    };
    hi - lo < 1.0
}

/// The data statement at one point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DataPoint {
    /// The interval `[L, U]` for the realization mean (or for `f(g)` when the noise is drawn
    /// once), from the values alone.
    pub mean_interval: [f64; 2],
    /// The model term added on both sides: `min(s_O, E_wc, E_sys + E_bias)`, or `E_avg` when
    /// the noise is drawn once.
    pub added: f64,
    /// `[L − added, U + added]`, within the spectrum: the data interval for the ideal value.
    pub interval: [f64; 2],
    /// The intersection of the model interval and the data interval; `None` when they are
    /// disjoint (possible only on the failure event, so evidence against the record).
    pub certified: Option<[f64; 2]>,
    /// Whether the data interval is narrower than the model interval.
    pub data_narrower: bool,
}

/// The data statement of one observable.
#[derive(Debug, Clone, PartialEq)]
pub struct DataStatement {
    /// The method used at every point of the run.
    pub method: MeanMethod,
    /// Failure probability of the interval from the data at each point (after Bonferroni).
    pub alpha_point: f64,
    /// Per time.
    pub points: Vec<DataPoint>,
    /// For the exact binomial interval: per time, the outcomes at `spectrum_max` and the
    /// shots counted, over all realizations pooled.
    pub counts: Option<Vec<[u64; 2]>>,
}

/// What [`observable_statement`] needs besides the values.
#[derive(Debug, Clone, Copy)]
pub struct DataInputs<'a> {
    /// `[spectrum_min, spectrum_max]`.
    pub spectrum: [f64; 2],
    /// The model statement's terms per time (the statement the model interval used).
    pub points: &'a [PointBounds],
    /// The light-cone terms per time, when computed (their deterministic part may be smaller).
    pub local: Option<&'a [LocalTerms]>,
    /// The model interval per time.
    pub model: &'a [[f64; 2]],
    pub redrawn: Redrawn,
    /// Failure probability per point of the interval from the data.
    pub alpha_point: f64,
    pub method: MeanMethod,
    /// The shots behind the values, when the run file declares that every shot's outcome is
    /// one of the spectrum's two ends (`two_outcomes`); `None` otherwise.
    pub two_outcomes: Option<&'a Shots>,
    /// Per time, the total of the device-error terms (docs/method.md §7) when the record has
    /// device sections: added to the bias side; `None` keeps the computation of a record
    /// without them exactly as it was.
    pub device: Option<&'a [f64]>,
}

/// Whether the shots of a two-outcome observable at one point can be pooled into one
/// binomial count (docs/method.md §6.1, "Clopper–Pearson"): all shots behind a point are
/// independent with one success probability when the noise is drawn once (given the draw),
/// redrawn every shot (each shot a fresh draw), or when there is one realization.
pub fn shots_pool(redrawn: Redrawn, realizations: usize) -> bool {
    matches!(redrawn, Redrawn::Once | Redrawn::EveryShot) || realizations == 1
}

/// Per time, the outcomes at the spectrum's upper end and the shots, summed over the
/// realizations in recorded order. The counts were checked when the run file was read
/// (`check_outcome_counts`); here each is the nearest integer. `None` if a sum overflows
/// 2⁵³ (counts beyond that are not exact in a double; no run comes near).
fn pooled_counts(
    values: ArrayView2<f64>,
    shots: &Shots,
    [a, b]: [f64; 2],
) -> Option<Vec<[u64; 2]>> {
    const EXACT: u64 = 1 << 53;
    (0..values.ncols())
        .map(|k| {
            let mut count = 0u64;
            let mut total = 0u64;
            for (r, &x) in values.column(k).iter().enumerate() {
                let n = shots.at(r, k);
                count = count.checked_add(outcome_count(x, n, a, b).0)?;
                total = total.checked_add(n)?;
            }
            (total <= EXACT).then_some([count, total])
        })
        .collect()
}

/// The smallest double above `x` (`f64::next_up`, which is stable only from Rust 1.86, above
/// the crate's minimum 1.85): the next bit pattern towards +∞; +∞ and NaN are kept.
fn up(x: f64) -> f64 {
    if x.is_nan() || x == f64::INFINITY {
        x
    } else if x == 0.0 {
        f64::from_bits(1)
    } else if x > 0.0 {
        f64::from_bits(x.to_bits() + 1)
    } else {
        f64::from_bits(x.to_bits() - 1)
    }
}

/// The largest double below `x` (`f64::next_down`).
fn down(x: f64) -> f64 {
    -up(-x)
}

/// The term added to the mean interval at time index `k` (see the module header).
fn added_term(inp: &DataInputs, k: usize, s_o: f64, covers_one_draw: bool) -> f64 {
    // The interval from the data covers `f(μ + g)` of one shared draw (not the mean over
    // draws) when the noise is drawn once, and when one realization's shots are counted.
    let once = matches!(inp.redrawn, Redrawn::Once) || covers_one_draw;
    // The same term of either statement (global or light cone): both are bounds fixed before
    // the data are seen, so the smaller serves.
    let term = |e_wc: f64, e_sys: f64, e_bias: f64, e_avg: f64| {
        if once {
            e_avg
        } else {
            cap(s_o, e_wc, e_sys + e_bias)
        }
    };
    let p = &inp.points[k];
    let Some(device) = inp.device else {
        let model = term(p.e_wc, p.e_sys, p.e_bias, p.e_avg);
        return match inp.local.and_then(|l| l.get(k)) {
            Some(l) => model.min(term(l.e_wc, l.e_sys, l.e_bias, l.e_avg)),
            None => model,
        };
    };
    // With device errors (docs/method.md §7): the data contain them, so their deterministic
    // total is added to the bias side as well. `p.e_avg` already holds it (capped at the
    // range); the other terms are coherent only.
    let d = device[k];
    let with = |e: f64| (e + d).min(s_o);
    let model = if once {
        p.e_avg
    } else {
        with(cap(s_o, p.e_wc, p.e_sys + p.e_bias))
    };
    match inp.local.and_then(|l| l.get(k)) {
        Some(l) if once => model.min(with(l.e_avg)),
        Some(l) => model.min(with(cap(s_o, l.e_wc, l.e_sys + l.e_bias))),
        None => model,
    }
}

/// The data statement of one observable from its `R × T` values (realizations in rows).
pub fn observable_statement(values: ArrayView2<f64>, inp: &DataInputs) -> DataStatement {
    let [a, b] = inp.spectrum;
    let s_o = b - a;
    // The points are independent of each other: their intervals for the mean are computed in
    // parallel, each from its own column in realization order, and collected in time order
    // (the same bits on any number of threads).
    // A two-outcome observable whose shots can be pooled gets the exact binomial interval
    // (fixed by the declaration, the redraw mode and R, before any value is read).
    let counts = match inp.two_outcomes {
        Some(shots) if shots_pool(inp.redrawn, values.nrows()) => {
            pooled_counts(values, shots, inp.spectrum)
        }
        _ => None,
    };
    let method = if counts.is_some() {
        MeanMethod::ClopperPearson
    } else {
        inp.method
    };
    let means: Vec<[f64; 2]> = match (&counts, method) {
        (Some(c), _) => c
            .iter()
            .map(|&[k, n]| {
                let [l, u] = clopper_pearson(k, n, inp.alpha_point);
                map_back(l, u, a, b)
            })
            .collect(),
        // Closed form: every column's recurrence advanced row by row, in blocks of columns
        // on the thread pool (the values are read in storage order; the same bits as column
        // by column).
        (None, MeanMethod::EmpiricalBernstein) => {
            let chunk = 64;
            (0..values.ncols().div_ceil(chunk))
                .into_par_iter()
                .flat_map_iter(|c| {
                    let cols = c * chunk..((c + 1) * chunk).min(values.ncols());
                    empirical_bernstein_columns(
                        values.slice(ndarray::s![.., cols]),
                        a,
                        b,
                        inp.alpha_point,
                    )
                })
                .collect()
        }
        (None, _) => (0..values.ncols())
            .into_par_iter()
            .map(|k| {
                let column: Vec<f64> = values.column(k).iter().copied().collect();
                betting_interval(&column, a, b, inp.alpha_point)
            })
            .collect(),
    };
    // Pooled shots of one realization with its own draw cover that draw's value.
    let covers_one_draw = counts.is_some() && matches!(inp.redrawn, Redrawn::EveryRealization);
    let points = (0..values.ncols())
        .map(|k| {
            let mean_interval = means[k];
            let added = added_term(inp, k, s_o, covers_one_draw);
            // Rounded outward by one ulp each; the ideal value lies in the spectrum.
            let interval = [
                down(mean_interval[0] - added).max(a),
                up(mean_interval[1] + added).min(b),
            ];
            let model = inp.model[k];
            let lo = model[0].max(interval[0]);
            let hi = model[1].min(interval[1]);
            DataPoint {
                mean_interval,
                added,
                interval,
                certified: (lo <= hi).then_some([lo, hi]),
                data_narrower: interval[1] - interval[0] < model[1] - model[0],
            }
        })
        .collect();
    DataStatement {
        method,
        alpha_point: inp.alpha_point,
        points,
        counts,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shares_add_up_to_at_most_epsilon() {
        for &c in &[0.95, 0.99, 0.5, 0.999999] {
            for &s in &[0.0, 0.1, 0.5, 0.9] {
                let sh = shares(c, s).unwrap();
                assert!(sh.model_epsilon + sh.data_epsilon <= sh.epsilon);
                // ε_m passes through 1 − ε_m: an absolute error of about one ulp of 1.
                assert!((sh.data_epsilon - s * sh.epsilon).abs() <= 4.0 * f64::EPSILON);
            }
        }
        let off = shares(0.95, 0.0).unwrap();
        assert_eq!(off.model_confidence, 0.95);
        assert_eq!(off.data_epsilon, 0.0);
        assert!(shares(0.95, 1.0).is_err());
        assert!(shares(0.95, -0.1).is_err());
        assert!(shares(0.95, f64::NAN).is_err());
    }

    /// One ulp either way, against IEEE 754 binary64: the spacing of doubles in [1, 2) is
    /// 2^-52, in [1/2, 1) it is 2^-53; the smallest subnormal is 2^-1074 (written 5e-324).
    #[test]
    fn up_and_down_step_one_double() {
        let eps = f64::EPSILON;
        assert_eq!(up(1.0), 1.0 + eps);
        assert_eq!(down(1.0), 1.0 - eps / 2.0);
        assert_eq!(up(-1.0), -1.0 + eps / 2.0);
        assert_eq!(down(-1.0), -1.0 - eps);
        assert_eq!(up(0.0), 5e-324);
        assert_eq!(up(-0.0), 5e-324);
        assert_eq!(down(0.0), -(5e-324));
        assert_eq!(down(f64::MIN_POSITIVE), f64::MIN_POSITIVE - 5e-324);
        assert_eq!(up(f64::MAX), f64::INFINITY);
        assert_eq!(down(f64::NEG_INFINITY), f64::NEG_INFINITY);
        assert!(up(f64::NAN).is_nan());
    }

    #[test]
    fn the_method_follows_the_run_size() {
        assert_eq!(method_for(40, 20, 4), MeanMethod::Betting);
        assert_eq!(method_for(1000, 1000, 32), MeanMethod::EmpiricalBernstein);
        assert_eq!(method_for(usize::MAX, 2, 2), MeanMethod::EmpiricalBernstein);
    }
}
