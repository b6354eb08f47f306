//! Every bound of a run at once: each observable at each recorded time, and the fidelity bound
//! at each time (bounds.md §3–§4). Pure: it takes the checked models and returns numbers.
//!
//! The order of operations is fixed (observables in name order, times in order, realizations
//! in order), so the numbers, and hence the certificate, reproduce to the bit.

use super::confidence::{self, ConfidenceError, ConfidenceSplit, Simultaneity};
use super::fidelity::{fidelity_bound, FidelityBound};
use super::global::{
    evaluate_point, shot_hoeffding, shot_hoeffding_from_sum, shot_normal_from_sum, PointBounds,
    PointInputs, ShotData, SourceData,
};
use crate::model::{NoiseModel, Observable, Run, Shots};

/// The bounds of one observable over the recorded times.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableBounds {
    /// The observable's name.
    pub name: String,
    /// `s_O = spectrum_max − spectrum_min`.
    pub spread: f64,
    /// The reported value `v̄` per time: the mean over realizations.
    pub mean: Vec<f64>,
    /// Every term per time.
    pub points: Vec<PointBounds>,
    /// Whether the shot term is the normal approximation from standard errors.
    pub shot_approximate: bool,
}

impl ObservableBounds {
    /// The interval for the ideal-model value at time index `k`.
    pub fn interval(&self, k: usize) -> [f64; 2] {
        let h = self.points[k].half_width;
        [self.mean[k] - h, self.mean[k] + h]
    }
}

/// All bounds of a run.
#[derive(Debug, Clone, PartialEq)]
pub struct RunBounds {
    /// How the confidence level was split.
    pub split: ConfidenceSplit,
    /// Per-source data, in instance order.
    pub sources: Vec<SourceData>,
    /// Per observable, in the run's order.
    pub observables: Vec<ObservableBounds>,
    /// Failure probability of the fidelity statement at each time.
    pub fidelity_p: f64,
    /// The fidelity lower bound per time.
    pub fidelity: Vec<FidelityBound>,
}

/// What the bounds need of one observable's data: per time, the sum of the values over the
/// realizations and the shot information, all summed in realization order. A streaming
/// reader accumulates these block by block; [`ObservableSums::of`] takes them from a whole
/// observable. Both give the same bits (the same additions in the same order).
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableSums {
    /// R, the number of realizations.
    pub realizations: usize,
    /// `Σ_r v[r, k]` per time `k`.
    pub value_sums: Vec<f64>,
    /// The shot information.
    pub shots: ShotSums,
}

/// The shot information behind the shot term.
#[derive(Debug, Clone, PartialEq)]
pub enum ShotSums {
    /// The same count at every point (Hoeffding).
    Uniform(u64),
    /// `Σ_r 1/S[r, k]` per time (Hoeffding; every count ≥ 1).
    InverseCounts(Vec<f64>),
    /// `Σ_r se[r, k]²` per time (normal approximation; standard errors take precedence over
    /// shot counts).
    SquaredErrors(Vec<f64>),
}

impl ObservableSums {
    /// The sums of an observable held in memory.
    pub fn of(o: &Observable) -> ObservableSums {
        let column_sums = |a: &ndarray::Array2<f64>, f: fn(f64) -> f64| -> Vec<f64> {
            let mut sums = vec![0.0; a.ncols()];
            for row in a.rows() {
                for (s, &x) in sums.iter_mut().zip(row.iter()) {
                    *s += f(x);
                }
            }
            sums
        };
        let shots = match (&o.stderr, &o.shots) {
            (Some(e), _) => ShotSums::SquaredErrors(column_sums(e, |x| x * x)),
            (None, Shots::Uniform(s)) => ShotSums::Uniform(*s),
            (None, Shots::PerPoint(a)) => {
                let mut sums = vec![0.0; a.ncols()];
                for row in a.rows() {
                    for (s, &n) in sums.iter_mut().zip(row.iter()) {
                        *s += 1.0 / n as f64;
                    }
                }
                ShotSums::InverseCounts(sums)
            }
        };
        ObservableSums {
            realizations: o.values.nrows(),
            value_sums: column_sums(&o.values, |x| x),
            shots,
        }
    }
}

/// Evaluates the bounds of a run one observable at a time (so a streaming reader can drop each
/// observable's data once it is summed).
///
/// The noise terms of a point depend on the observable only through `s_O` (the global
/// statement), so they are computed once per time and distinct `s_O` and reused, bit for bit:
/// the same function with the same inputs.
pub struct RunEvaluator<'a> {
    times: &'a [f64],
    noise: &'a NoiseModel,
    simultaneity: Simultaneity,
    split: ConfidenceSplit,
    sources: Vec<SourceData>,
    /// Noise terms per time, by the bits of `s_O` (shot terms not yet filled in).
    noise_terms: Vec<(u64, Vec<PointBounds>)>,
}

impl<'a> RunEvaluator<'a> {
    /// Splits the confidence over `n_observables` observables at `times`.
    pub fn new(
        times: &'a [f64],
        noise: &'a NoiseModel,
        n_observables: usize,
        confidence_level: f64,
        simultaneity: Simultaneity,
    ) -> Result<RunEvaluator<'a>, ConfidenceError> {
        let split = confidence::split(
            confidence_level,
            confidence::has_fluctuation_term(noise.redrawn),
            true,
            times.len() * n_observables,
            simultaneity,
        )?;
        let sources = noise
            .instances
            .iter()
            .map(SourceData::from_instance)
            .collect();
        Ok(RunEvaluator {
            times,
            noise,
            simultaneity,
            split,
            sources,
            noise_terms: Vec::new(),
        })
    }

    /// The noise terms at every time for spread `s_o` and `r` realizations.
    fn noise_terms(&mut self, s_o: f64, r: usize) -> &[PointBounds] {
        let key = s_o.to_bits();
        let i = match self.noise_terms.iter().position(|(k, _)| *k == key) {
            Some(i) => i,
            None => {
                let points = self
                    .times
                    .iter()
                    .map(|&t| {
                        evaluate_point(&PointInputs {
                            s_o,
                            t,
                            sources: &self.sources,
                            sensitivities: None,
                            redrawn: self.noise.redrawn,
                            realizations: r,
                            // No shot data: the shot term is filled in per observable.
                            shots: ShotData::Counts(&[]),
                            p: self.split.p_point,
                            alpha: self.split.alpha_point,
                            p_single: self.split.p_single_point,
                        })
                    })
                    .collect();
                self.noise_terms.push((key, points));
                self.noise_terms.len() - 1
            }
        };
        &self.noise_terms[i].1
    }

    /// The bounds of one observable of spread `spread` from its sums.
    pub fn observable(
        &mut self,
        name: &str,
        spread: f64,
        sums: &ObservableSums,
    ) -> ObservableBounds {
        let r = sums.realizations;
        let alpha = self.split.alpha_point;
        // Ordered summation of R values of one sign-bounded quantity: plain summation in
        // realization order is deterministic, and its rounding (≤ R ulp of the sum) is far
        // below the shot term.
        let mean = sums
            .value_sums
            .iter()
            .map(|s| s / r.max(1) as f64)
            .collect();
        let uniform = match sums.shots {
            ShotSums::Uniform(s) => shot_hoeffding(spread, &vec![s; r], alpha),
            _ => f64::NAN,
        };
        let noise = self.noise_terms(spread, r);
        let points = noise
            .iter()
            .enumerate()
            .map(|(k, p)| {
                let (e_shot, approximate) = match &sums.shots {
                    ShotSums::Uniform(_) => (uniform, false),
                    ShotSums::InverseCounts(inv) => {
                        (shot_hoeffding_from_sum(spread, r, inv[k], alpha), false)
                    }
                    ShotSums::SquaredErrors(sq) => (shot_normal_from_sum(r, sq[k], alpha), true),
                };
                PointBounds {
                    e_shot,
                    shot_approximate: approximate,
                    half_width: p.e_avg + e_shot,
                    ..*p
                }
            })
            .collect();
        ObservableBounds {
            name: name.to_string(),
            spread,
            mean,
            points,
            shot_approximate: matches!(sums.shots, ShotSums::SquaredErrors(_)),
        }
    }

    /// All bounds of the run, with the observables' bounds in the run's order.
    pub fn finish(self, observables: Vec<ObservableBounds>) -> RunBounds {
        let split = self.split;
        let fidelity_p = match self.simultaneity {
            Simultaneity::Simultaneous => split.epsilon / self.times.len().max(1) as f64,
            Simultaneity::Pointwise => split.epsilon,
        };
        let fidelity = self
            .times
            .iter()
            .map(|&t| fidelity_bound(&self.sources, t, fidelity_p))
            .collect();
        RunBounds {
            split,
            sources: self.sources,
            observables,
            fidelity_p,
            fidelity,
        }
    }
}

/// Evaluates every bound of `run` under `noise` at confidence `confidence_level`.
pub fn evaluate_run(
    run: &Run,
    noise: &NoiseModel,
    confidence_level: f64,
    simultaneity: Simultaneity,
) -> Result<RunBounds, ConfidenceError> {
    let mut ev = RunEvaluator::new(
        &run.times,
        noise,
        run.observables.len(),
        confidence_level,
        simultaneity,
    )?;
    let observables = run
        .observables
        .iter()
        .map(|o| ev.observable(&o.name, o.spread(), &ObservableSums::of(o)))
        .collect();
    Ok(ev.finish(observables))
}
