//! Every bound of a run at once: each observable at each recorded time, and the fidelity bound
//! at each time (bounds.md §3–§4). Pure: it takes the checked models and returns numbers.
//!
//! The order of operations is fixed (observables in name order, times in order, realizations
//! in order), so the numbers, and hence the certificate, reproduce to the bit.

use super::confidence::{self, ConfidenceError, ConfidenceSplit, Simultaneity};
use super::fidelity::{fidelity_bound, FidelityBound};
use super::global::{evaluate_point, PointBounds, PointInputs, ShotData, SourceData};
use crate::model::{NoiseModel, Run, Shots};

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

/// Evaluates every bound of `run` under `noise` at confidence `confidence`.
pub fn evaluate_run(
    run: &Run,
    noise: &NoiseModel,
    confidence_level: f64,
    simultaneity: Simultaneity,
) -> Result<RunBounds, ConfidenceError> {
    let n_points = run.n_times() * run.observables.len();
    let split = confidence::split(
        confidence_level,
        confidence::has_fluctuation_term(noise.redrawn),
        true,
        n_points,
        simultaneity,
    )?;
    let sources: Vec<SourceData> = noise
        .instances
        .iter()
        .map(SourceData::from_instance)
        .collect();
    let r = run.n_realizations();
    let mut observables = Vec::with_capacity(run.observables.len());
    let mut shots = vec![0u64; r];
    let mut se = vec![0f64; r];
    for o in &run.observables {
        let spread = o.spread();
        let mut mean = Vec::with_capacity(run.n_times());
        let mut points = Vec::with_capacity(run.n_times());
        for (k, &t) in run.times.iter().enumerate() {
            let column = o.values.column(k);
            // Ordered summation of R values of one sign-bounded quantity: plain summation in
            // realization order is deterministic, and its rounding (≤ R ulp of the sum) is far
            // below the shot term.
            let mut sum = 0.0;
            for &v in column.iter() {
                sum += v;
            }
            mean.push(sum / r.max(1) as f64);
            let shot_data = match &o.stderr {
                Some(e) => {
                    for (slot, &x) in se.iter_mut().zip(e.column(k).iter()) {
                        *slot = x;
                    }
                    ShotData::StdErr(&se)
                }
                None => {
                    for (i, slot) in shots.iter_mut().enumerate() {
                        *slot = match &o.shots {
                            Shots::Uniform(s) => *s,
                            Shots::PerPoint(a) => a[[i, k]],
                        };
                    }
                    ShotData::Counts(&shots)
                }
            };
            points.push(evaluate_point(&PointInputs {
                s_o: spread,
                t,
                sources: &sources,
                sensitivities: None,
                redrawn: noise.redrawn,
                realizations: r,
                shots: shot_data,
                p: split.p_point,
                alpha: split.alpha_point,
                p_single: split.p_single_point,
            }));
        }
        observables.push(ObservableBounds {
            name: o.name.clone(),
            spread,
            mean,
            points,
            shot_approximate: o.stderr.is_some(),
        });
    }
    let fidelity_p = match simultaneity {
        Simultaneity::Simultaneous => split.epsilon / run.n_times().max(1) as f64,
        Simultaneity::Pointwise => split.epsilon,
    };
    let fidelity = run
        .times
        .iter()
        .map(|&t| fidelity_bound(&sources, t, fidelity_p))
        .collect();
    Ok(RunBounds {
        split,
        sources,
        observables,
        fidelity_p,
        fidelity,
    })
}
