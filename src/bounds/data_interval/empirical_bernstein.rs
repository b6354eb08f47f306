//! The predictable plug-in empirical-Bernstein confidence interval for a bounded mean.
//!
//! Exists as the closed-form, O(R) alternative to the betting interval (used where a root
//! search per point is too costly). Reproduces confseq 0.0.11's `predmix_empbern_ci(x, alpha)`:
//! `predmix_empbern_cs(x, alpha, truncation=1/2, fixed_n=n)` read at t = n, i.e. lower bound
//! from `z` and upper bound `1 − (lower bound from 1 − z)`, each at α/2. Note: confseq's
//! `predmix_empbern_ci` does not pass its `running_intersection` argument on, so the
//! reference takes no running intersection; neither does this (doing so would be valid too,
//! and could only narrow the interval). Reference: Waudby-Smith & Ramdas, JRSS-B 2024,
//! arXiv 2010.09686 (its predictable plug-in empirical-Bernstein interval; theorem and equation
//! numbers not checked here).
//!
//! Lower bound at level a (on `z ∈ [0, 1]`), with `λ_i = min(1/2, lambda_predmix_eb)`,
//! `ψ(λ) = −ln(1 − λ) − λ`, `v_i = (z_i − μ̂_{i−1})²`, `μ̂_0 = 0`, `μ̂_t = Σ_{j≤t} z_j / t`:
//! `l = max(0, Σλ_i z_i/Σλ_i − (ln(1/a) + Σ v_i ψ(λ_i))/Σλ_i)`.

use super::{map_back, trivial, U};

/// Two-sided confidence interval, at total failure probability `alpha`, for the common mean of
/// independent values `values` known to lie in [lo, hi], by predictable plug-in empirical
/// Bernstein (confseq 0.0.11 `predmix_empbern_ci`). Values outside [lo, hi] are clamped first;
/// the result lies in [lo, hi] and is rounded outward. Empty `values`, `lo >= hi` or `alpha`
/// outside (0, 1) give `[lo, hi]`.
pub fn empirical_bernstein_interval(values: &[f64], lo: f64, hi: f64, alpha: f64) -> [f64; 2] {
    if trivial(values, lo, hi, alpha) {
        return [lo, hi];
    }
    let [l, u] = symmetric(values, lo, hi, alpha / 2.0);
    map_back(l, u, lo, hi)
}

/// Both ends in one pass, on the scaled values `z` (formed on the fly, as [`super::scale`]
/// does).
///
/// The upper end is `1 − (lower end from 1 − z)`. For `1 − z` every quantity the lower end
/// uses is the same as for `z` in exact arithmetic: the regularised running mean becomes
/// `1 − μ̂_t` (its cap at 1 never binds, since `(1/2 + Σz)/(t + 1) < 1`), so `σ̂²_t`, the bets
/// `λ_i`, `v_i = (z_i − μ̂_{i−1})²` for `i ≥ 2` and `ψ(λ_i)` are unchanged, and
/// `Σλ(1 − z)/Σλ = 1 − Σλz/Σλ`; only `v_1` differs (the plain running mean starts at 0 for
/// both). So the interval is `[Σλz/Σλ − margin, Σλz/Σλ + margin']`: one pass, one `ln_1p` per value (none where the bet
/// sits at its cap, whose `ψ` is formed once), no allocation. The rounding of the two forms
/// differs by a few ulps, far inside the slack below.
fn symmetric(values: &[f64], lo: f64, hi: f64, a: f64) -> [f64; 2] {
    let c = Constants::new(values.len(), lo, hi, a);
    let mut st = State::new();
    for (i, &x) in values.iter().enumerate() {
        st.push(&c, &Step::at(i), x);
    }
    st.finish(&c)
}

/// [`empirical_bernstein_interval`] for every column of `values` (realizations in rows, in
/// recorded order), bit for bit the same as the function applied column by column. The
/// recurrences of all columns advance together, row after row, so the values are read in
/// their storage order (a column-by-column pass over a row-major array would read one value
/// per cache line).
pub fn empirical_bernstein_columns(
    values: ndarray::ArrayView2<f64>,
    lo: f64,
    hi: f64,
    alpha: f64,
) -> Vec<[f64; 2]> {
    let (rows, cols) = values.dim();
    if rows == 0 || trivial(&[0.0], lo, hi, alpha) {
        return vec![[lo, hi]; cols];
    }
    let c = Constants::new(rows, lo, hi, alpha / 2.0);
    let mut states = vec![State::new(); cols];
    for (i, row) in values.rows().into_iter().enumerate() {
        let step = Step::at(i);
        for (st, &x) in states.iter_mut().zip(row.iter()) {
            st.push(&c, &step, x);
        }
    }
    states
        .into_iter()
        .map(|st| {
            let [l, u] = st.finish(&c);
            map_back(l, u, lo, hi)
        })
        .collect()
}

/// What the `i`-th value of every interval shares: `1/t` and `1/(t + 1)` for `t = i + 1`,
/// formed once per row and multiplied (a division per value and quantity otherwise). The
/// running means they form are predictable whatever their rounding, which is all the
/// interval's validity needs (docs/method.md §6.1), and the outward slack covers the rest.
struct Step {
    inv_t: f64,
    inv_t1: f64,
}

impl Step {
    fn at(i: usize) -> Step {
        let t = (i + 1) as f64;
        Step {
            inv_t: 1.0 / t,
            inv_t1: 1.0 / (t + 1.0),
        }
    }
}

/// What every value of one interval shares.
struct Constants {
    lo: f64,
    /// `1/(hi − lo)`.
    inv_w: f64,
    /// `2 ln(1/a)/n`, the numerator of the squared bets.
    num_n: f64,
    n: f64,
    /// `ln(1/a)`.
    log_inv: f64,
    /// `ψ` at the cap.
    psi_cap: f64,
}

/// The cap of the bets (confseq's truncation 1/2).
const CAP: f64 = 0.5;

impl Constants {
    fn new(n: usize, lo: f64, hi: f64, a: f64) -> Constants {
        Constants {
            lo,
            inv_w: 1.0 / (hi - lo),
            n: n as f64,
            num_n: 2.0 * (1.0 / a).ln() / n as f64,
            log_inv: (1.0 / a).ln(),
            psi_cap: -(-CAP).ln_1p() - CAP,
        }
    }
}

/// The running sums of one interval, advanced value by value in recorded order.
#[derive(Debug, Clone, Copy)]
struct State {
    i: usize,
    sum_lam: f64,
    sum_lam_z: f64,
    sum_v_psi: f64,
    first_lower: f64,
    first_upper: f64,
    /// Plain running mean (for v) and regularised running moments (for the bets), each a
    /// sequential sum in recorded order.
    sum_z: f64,
    mu_prev: f64,
    sq: f64,
    sigma2_prev: f64,
}

impl State {
    fn new() -> State {
        State {
            i: 0,
            sum_lam: 0.0,
            sum_lam_z: 0.0,
            sum_v_psi: 0.0,
            first_lower: 0.0,
            first_upper: 0.0,
            sum_z: 0.0,
            mu_prev: 0.0,
            sq: 0.0,
            sigma2_prev: 0.25,
        }
    }

    #[inline]
    fn push(&mut self, c: &Constants, step: &Step, x: f64) {
        let zi = ((x - c.lo) * c.inv_w).clamp(0.0, 1.0);
        let raw = (c.num_n / self.sigma2_prev).sqrt();
        let li = if raw.is_nan() { 0.0 } else { raw.min(CAP) };
        let psi = if li == CAP {
            c.psi_cap
        } else {
            -(-li).ln_1p() - li
        };
        let d = zi - self.mu_prev;
        if self.i == 0 {
            // The one term that differs between the two sides: the reference's running mean
            // starts at μ̂_0 = 0 for `z` and for `1 − z` alike.
            let e = 1.0 - zi;
            self.first_upper = e * e * psi;
            self.first_lower = d * d * psi;
        }
        self.sum_v_psi += d * d * psi;
        self.sum_lam += li;
        self.sum_lam_z += li * zi;
        self.sum_z += zi;
        self.mu_prev = self.sum_z * step.inv_t;
        let mu = ((0.5 + self.sum_z) * step.inv_t1).min(1.0);
        let e = zi - mu;
        self.sq += e * e;
        self.sigma2_prev = (0.25 + self.sq) * step.inv_t1;
        self.i += 1;
    }

    fn finish(&self, c: &Constants) -> [f64; 2] {
        let n = c.n;
        let wmean = self.sum_lam_z / self.sum_lam;
        let margin = (c.log_inv + self.sum_v_psi) / self.sum_lam;
        // The upper side's sum: the same but for its first term (`z_1²` replaced by
        // `(1 − z_1)²`).
        let margin_upper =
            (c.log_inv + (self.sum_v_psi - self.first_lower + self.first_upper)) / self.sum_lam;
        let slack = 2.0
            * ((2.0 * n + 10.0) * U * (wmean.abs() + margin.abs() + margin_upper.abs() + 1.0)
                + 4.0 * U);
        let l = wmean - margin - slack;
        let u = wmean + margin_upper + slack;
        if l.is_nan() || u.is_nan() {
            return [0.0, 1.0];
        }
        [l.max(0.0), u.min(1.0)]
    }
}

#[cfg(test)]
mod tests {
    use super::super::fixtures;
    use super::*;

    /// Against confseq 0.0.11 `predmix_empbern_ci(x, alpha)`
    /// (`tests/reference/data_interval/betting.json`, field `empbern`): to 1e-9 relative, never
    /// narrower.
    #[test]
    fn columns_equal_the_interval_column_by_column_to_the_bit() {
        let (rows, cols) = (37, 5);
        let v = ndarray::Array2::from_shape_fn((rows, cols), |(r, c)| {
            (((r * 7919 + c * 104729) % 1000) as f64 / 500.0 - 1.0) * (0.2 + 0.15 * c as f64)
        });
        let got = empirical_bernstein_columns(v.view(), -1.0, 1.0, 1e-3);
        for (k, g) in got.iter().enumerate() {
            let col: Vec<f64> = v.column(k).iter().copied().collect();
            let want = empirical_bernstein_interval(&col, -1.0, 1.0, 1e-3);
            assert_eq!(g.map(f64::to_bits), want.map(f64::to_bits), "column {k}");
            assert!(g[1] - g[0] < 2.0, "column {k} is informative");
        }
    }

    #[test]
    fn matches_confseq_predmix_empbern_ci() {
        for (i, c) in fixtures::cases().iter().enumerate() {
            let [l, u] = empirical_bernstein_interval(&c.x, 0.0, 1.0, c.alpha);
            fixtures::assert_outward_close(&format!("case {i} ({})", c.kind), [l, u], c.empbern);
        }
    }
}
