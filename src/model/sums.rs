//! The per-time sums of one observable's data that the bounds need.
//!
//! Why here: the run-file reader accumulates these while the R × T datasets stream by (and then
//! drops the data), and the bounds consume them; the model sits below both, so neither the
//! reader needs the bounds nor the bounds the reader. Re-exported as
//! `bounds::run_bounds::{ObservableSums, ShotSums}`.

use super::run::{Observable, Shots};

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
