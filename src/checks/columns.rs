//! Per-time statistics of one observable's R × T arrays, read row by row.
//!
//! The arrays are row-major (one row per realization), so a column is strided by T values and
//! reading one column per time touches a new cache line per value. Here every array is read
//! once, row after row, accumulating one running sum per time: the memory is read in order and
//! nothing is copied per point.
//!
//! Floating point: each per-time sum is taken in realization order, exactly as the per-column
//! functions of [`super::variance`] and [`crate::bounds::global`] take it, so every number is
//! the same bit for bit (the tests below compare with them).

use crate::bounds::global::{shot_hoeffding_from_sum, shot_normal_from_sum};
use crate::model::{Observable, Shots};

/// The shot information of one time, summed over the realizations.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ShotSum {
    /// `Σ_r 1/S_r` and whether some `S_r` is zero.
    Counts { inv_sum: f64, any_zero: bool },
    /// `Σ_r se_r²` (standard errors given instead of counts).
    StdErr { sq_sum: f64 },
}

impl ShotSum {
    /// `V_shot` from the maximised Bhatia–Davis `h` ([`super::variance::shot_variance_counts`])
    /// or from the standard errors ([`super::variance::shot_variance_stderr`]), over `n`
    /// realizations.
    pub fn variance(self, h: f64, n: usize) -> f64 {
        match self {
            _ if n == 0 => f64::INFINITY,
            ShotSum::Counts { any_zero: true, .. } => f64::INFINITY,
            ShotSum::Counts { inv_sum, .. } => h * inv_sum / n as f64,
            ShotSum::StdErr { sq_sum } => sq_sum / n as f64,
        }
    }

    /// `E_shot` at failure probability `alpha` for an observable of spread `s_o`, over `n`
    /// realizations ([`crate::bounds::global::shot_hoeffding`] or
    /// [`crate::bounds::global::shot_normal`]).
    pub fn term(self, s_o: f64, n: usize, alpha: f64) -> f64 {
        match self {
            ShotSum::Counts { any_zero: true, .. } => f64::INFINITY,
            ShotSum::Counts { inv_sum, .. } => shot_hoeffding_from_sum(s_o, n, inv_sum, alpha),
            ShotSum::StdErr { sq_sum } => shot_normal_from_sum(n, sq_sum, alpha),
        }
    }

    /// Whether the shot information is standard errors (approximate).
    pub fn approximate(self) -> bool {
        matches!(self, ShotSum::StdErr { .. })
    }
}

/// Mean, unbiased sample variance and shot sums of one observable, per time.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnStats {
    /// Number of realizations (rows).
    pub rows: usize,
    /// Mean per time (NaN with fewer than two rows, as the variance test has no use for it).
    pub mean: Vec<f64>,
    /// Unbiased sample variance per time (NaN with fewer than two rows).
    pub variance: Vec<f64>,
    pub shots: Vec<ShotSum>,
}

impl ColumnStats {
    /// The statistics of `o`, each array read once in row order.
    pub fn of(o: &Observable) -> ColumnStats {
        ColumnStats::with_mean(o, None)
    }

    /// As [`ColumnStats::of`], with the per-time means already known: `Σ_r v[r, k] / R` summed
    /// in realization order, as the streaming reader and the bounds compute them
    /// ([`crate::bounds::run_bounds::ObservableSums`]), the same bits as the first pass here.
    /// The values are then read once instead of twice. Ignored unless there is one per time.
    pub fn with_mean(o: &Observable, mean: Option<&[f64]>) -> ColumnStats {
        let (rows, cols) = o.values.dim();
        let (mean, variance) = if rows >= 2 {
            mean_and_variance_per_column(o, cols, mean.filter(|m| m.len() == cols))
        } else {
            (vec![f64::NAN; cols], vec![f64::NAN; cols])
        };
        let shots = match &o.stderr {
            Some(se) => {
                let mut sq = vec![0.0; se.ncols()];
                for row in se.rows() {
                    for (s, &x) in sq.iter_mut().zip(row.iter()) {
                        *s += x * x;
                    }
                }
                sq.into_iter()
                    .map(|sq_sum| ShotSum::StdErr { sq_sum })
                    .collect()
            }
            None => match &o.shots {
                Shots::Uniform(s) => {
                    let mut inv_sum = 0.0;
                    for _ in 0..rows {
                        inv_sum += 1.0 / *s as f64;
                    }
                    let any_zero = *s == 0 && rows > 0;
                    vec![ShotSum::Counts { inv_sum, any_zero }; cols]
                }
                Shots::PerPoint(a) => {
                    let mut inv = vec![0.0; a.ncols()];
                    let mut zero = vec![false; a.ncols()];
                    for row in a.rows() {
                        for ((s, z), &x) in inv.iter_mut().zip(zero.iter_mut()).zip(row.iter()) {
                            *s += 1.0 / x as f64;
                            *z |= x == 0;
                        }
                    }
                    inv.into_iter()
                        .zip(zero)
                        .map(|(inv_sum, any_zero)| ShotSum::Counts { inv_sum, any_zero })
                        .collect()
                }
            },
        };
        ColumnStats {
            rows,
            mean,
            variance,
            shots,
        }
    }
}

/// The two-pass mean and variance of [`super::variance::mean_and_variance`], for every column
/// at once (`rows ≥ 2`).
fn mean_and_variance_per_column(
    o: &Observable,
    cols: usize,
    known_mean: Option<&[f64]>,
) -> (Vec<f64>, Vec<f64>) {
    let n = o.values.nrows();
    // Rows as slices (contiguous in the common standard layout, so the per-time loops
    // vectorise across times); each time's sums are taken in realization order either way.
    let standard;
    let values = match o.values.as_slice() {
        Some(v) => v,
        None => {
            standard = o.values.as_standard_layout().into_owned();
            standard.as_slice().unwrap_or(&[])
        }
    };
    let rows = || values.chunks_exact(cols.max(1));
    let mean: Vec<f64> = match known_mean {
        Some(m) => m.to_vec(),
        None => {
            let mut sum = vec![0.0; cols];
            for row in rows() {
                for (s, &v) in sum.iter_mut().zip(row) {
                    *s += v;
                }
            }
            sum.iter().map(|s| s / n as f64).collect()
        }
    };
    let mut squares = vec![0.0; cols];
    let mut residual = vec![0.0; cols];
    for row in rows() {
        for (((q, e), &m), &v) in squares
            .iter_mut()
            .zip(residual.iter_mut())
            .zip(&mean)
            .zip(row)
        {
            let d = v - m;
            *q += d * d;
            *e += d;
        }
    }
    let variance = squares
        .iter()
        .zip(&residual)
        .map(|(&q, &e)| (q - e * e / n as f64).max(0.0) / (n - 1) as f64)
        .collect();
    (mean, variance)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bounds::global::{shot_hoeffding, shot_normal};
    use crate::checks::variance::{mean_and_variance, shot_variance_counts, shot_variance_stderr};
    use ndarray::Array2;

    fn observable(values: Array2<f64>, shots: Shots, stderr: Option<Array2<f64>>) -> Observable {
        Observable {
            name: "A".into(),
            values,
            shots,
            stderr,
            ideal: None,
            support: vec![0],
            spectrum_min: -1.0,
            spectrum_max: 1.0,
            description: None,
            terms: None,
            two_outcomes: false,
        }
    }

    /// The mean the bounds compute from the streamed sums (`Σ_r v / R`, realization order) is
    /// the first pass's mean bit for bit, so `with_mean` gives the statistics of `of`.
    #[test]
    fn the_streamed_mean_gives_the_two_pass_statistics() {
        let (r, t) = (53, 9);
        let values = Array2::from_shape_fn((r, t), |(i, k)| {
            -2e5 + ((i * 11 + k * 5) as f64).cos() * 3e-2 + i as f64 * 1e-7
        });
        let o = observable(values.clone(), Shots::Uniform(100), None);
        let mut sums = vec![0.0; t];
        for row in values.rows() {
            for (s, &x) in sums.iter_mut().zip(row) {
                *s += x;
            }
        }
        let mean: Vec<f64> = sums.iter().map(|s| s / r as f64).collect();
        assert_eq!(ColumnStats::with_mean(&o, Some(&mean)), ColumnStats::of(&o));
        // A mean of the wrong length is ignored.
        assert_eq!(
            ColumnStats::with_mean(&o, Some(&mean[1..])),
            ColumnStats::of(&o)
        );
    }

    /// Values on a large offset with a spread over six decades: the row-by-row sums give the
    /// per-column two-pass results bit for bit, and so do the shot sums (counts per point, one
    /// of them zero; standard errors).
    #[test]
    fn row_order_sums_equal_the_per_column_functions_bit_for_bit() {
        let (r, t) = (37, 11);
        let values = Array2::from_shape_fn((r, t), |(i, k)| {
            1e3 + ((i * 7 + k * 13) as f64).sin() * 1e-3
        });
        let counts = Array2::from_shape_fn((r, t), |(i, k)| {
            if (i, k) == (5, 3) {
                0
            } else {
                (17 + i * 3 + k) as u64
            }
        });
        let se = Array2::from_shape_fn((r, t), |(i, k)| 0.01 + 1e-4 * (i + k) as f64);
        let o = observable(values.clone(), Shots::PerPoint(counts.clone()), None);
        let stats = ColumnStats::of(&o);
        let with_se = ColumnStats::of(&observable(
            values.clone(),
            Shots::Uniform(7),
            Some(se.clone()),
        ));
        let uniform = ColumnStats::of(&observable(values.clone(), Shots::Uniform(7), None));
        for k in 0..t {
            let col: Vec<f64> = values.column(k).to_vec();
            let (m, v) = mean_and_variance(&col).unwrap();
            assert_eq!(stats.mean[k].to_bits(), m.to_bits());
            assert_eq!(stats.variance[k].to_bits(), v.to_bits());
            let c: Vec<u64> = counts.column(k).to_vec();
            let h = 0.7;
            assert_eq!(
                stats.shots[k].variance(h, r).to_bits(),
                shot_variance_counts(h, &c).to_bits()
            );
            for alpha in [0.05, 1e-9, 0.0] {
                assert_eq!(
                    stats.shots[k].term(2.0, r, alpha).to_bits(),
                    shot_hoeffding(2.0, &c, alpha).to_bits()
                );
                let e: Vec<f64> = se.column(k).to_vec();
                assert_eq!(
                    with_se.shots[k].term(2.0, r, alpha).to_bits(),
                    shot_normal(&e, alpha).to_bits()
                );
                assert_eq!(
                    with_se.shots[k].variance(h, r).to_bits(),
                    shot_variance_stderr(&e).to_bits()
                );
                let u = vec![7u64; r];
                assert_eq!(
                    uniform.shots[k].term(2.0, r, alpha).to_bits(),
                    shot_hoeffding(2.0, &u, alpha).to_bits()
                );
            }
        }
        assert_eq!(stats.shots[3].variance(1.0, r), f64::INFINITY);
        assert!(with_se.shots[0].approximate() && !stats.shots[0].approximate());
        // One row: no variance.
        let one = ColumnStats::of(&observable(Array2::zeros((1, 3)), Shots::Uniform(5), None));
        assert!(one.variance.iter().all(|v| v.is_nan()));
    }
}
