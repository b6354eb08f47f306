//! The pure checks of layout v1: names, times, finiteness, ranges, supports and term structure.
//!
//! Each check returns the message of a problem (what is wrong and the fix) or the checked value;
//! the caller attaches the HDF5 path. Nothing here touches a file, so all of it is unit-tested.
//!
//! Range tolerance (docs/run-format.md): a value `v` of an observable with spectrum
//! `[lo, hi]` is accepted if `lo − tol ≤ v ≤ hi + tol`, where
//! `tol = 1e-9·(hi − lo) + 1e-12 + ρ·max(|lo|, |hi|)` and `ρ` is the relative rounding of the
//! stored float type (0 for float64, 2^-24 for float32, 2^-11 for float16): an estimate that is
//! exactly at the edge of the spectrum may round outward once when it is stored narrowly.

use ndarray::{ArrayView1, ArrayView2};

/// Relative slack of the terms-consistency check, for the rounding of the sum.
const TERMS_RELATIVE_SLACK: f64 = 1e-9;
/// Absolute slack of the range and terms checks.
const ABSOLUTE_SLACK: f64 = 1e-12;
/// Relative (to the spread) slack of the range check.
const SPREAD_SLACK: f64 = 1e-9;

/// Whether `name` is a valid observable name: non-empty, of ASCII letters, digits, `_`, `-`,
/// `.`.
pub fn valid_name(name: &str) -> bool {
    !name.is_empty()
        && name
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'_' | b'-' | b'.'))
}

/// Checks `/times`: at least one value, all finite, ≥ 0 and non-decreasing.
pub fn check_times(times: &[f64]) -> Vec<String> {
    let mut out = Vec::new();
    if times.is_empty() {
        out.push("holds no times; store at least one time".to_string());
        return out;
    }
    if let Some(k) = times.iter().position(|t| !t.is_finite()) {
        let n = times.iter().filter(|t| !t.is_finite()).count();
        out.push(format!(
            "{n} time(s) are NaN or infinite (first at index {k}); every time must be a finite number"
        ));
    }
    if let Some(k) = times.iter().position(|&t| t < 0.0) {
        out.push(format!(
            "time {} at index {k} is negative; times count from the start of the evolution and must be ≥ 0",
            times[k]
        ));
    }
    if let Some(k) = (1..times.len()).find(|&k| times[k] < times[k - 1]) {
        out.push(format!(
            "times decrease at index {k} ({} after {}); sort the times (and the columns of every dataset with them) into non-decreasing order",
            times[k],
            times[k - 1]
        ));
    }
    out
}

/// What one pass over a block of values establishes for the scans below, so that they need
/// no pass of their own when nothing is wrong: whether every value is finite, and the
/// smallest and the largest value that is not NaN (±∞ included; `+∞` and `−∞` for a block
/// of NaNs only).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BlockExtent {
    pub all_finite: bool,
    pub min: f64,
    pub max: f64,
}

impl BlockExtent {
    /// The extent of `block`, by a pass of its own (for tests: readers take it in their
    /// summing pass).
    #[cfg(test)]
    pub fn of(block: ArrayView2<f64>) -> BlockExtent {
        let mut acc = ExtentColumns::new(1);
        for &x in block.iter() {
            acc.push_row(std::slice::from_ref(&x));
        }
        acc.extent()
    }
}

/// Per-column accumulators of a [`BlockExtent`], updated row by row (element-wise over the
/// columns, which the compiler vectorises; the pass that sums a block per time takes them
/// along, see `observables::scan_floats`).
#[derive(Debug, Clone)]
pub struct ExtentColumns {
    min: Vec<f64>,
    max: Vec<f64>,
    /// `Σ 0·x`: zero while every value is finite, NaN from the first NaN or infinity on.
    probe: Vec<f64>,
}

impl ExtentColumns {
    pub fn new(cols: usize) -> ExtentColumns {
        ExtentColumns {
            min: vec![f64::INFINITY; cols],
            max: vec![f64::NEG_INFINITY; cols],
            probe: vec![0.0; cols],
        }
    }

    /// Starts again for the next block.
    pub fn reset(&mut self) {
        self.min.fill(f64::INFINITY);
        self.max.fill(f64::NEG_INFINITY);
        self.probe.fill(0.0);
    }

    /// Takes one row (as many values as columns).
    #[inline]
    pub fn push_row(&mut self, row: &[f64]) {
        for (((lo, hi), p), &x) in self
            .min
            .iter_mut()
            .zip(self.max.iter_mut())
            .zip(self.probe.iter_mut())
            .zip(row)
        {
            // A comparison with NaN is false: NaN is skipped by both.
            *lo = if x < *lo { x } else { *lo };
            *hi = if x > *hi { x } else { *hi };
            *p += 0.0 * x;
        }
    }

    /// The extent of the rows taken so far.
    pub fn extent(&self) -> BlockExtent {
        BlockExtent {
            all_finite: self.probe.iter().all(|&p| p == 0.0),
            min: self
                .min
                .iter()
                .fold(f64::INFINITY, |m, &x| if x < m { x } else { m }),
            max: self
                .max
                .iter()
                .fold(f64::NEG_INFINITY, |m, &x| if x > m { x } else { m }),
        }
    }
}

/// Finds the non-finite entries of an R × T dataset read in row blocks: their count and the
/// first position (row-major), as `check_finite_2d` reported them for a whole array.
#[derive(Debug, Default)]
pub struct FiniteScan {
    count: usize,
    first: Option<[usize; 2]>,
}

impl FiniteScan {
    /// Scans `block`, whose first row is realization `r0` (for tests: readers use
    /// `push_known`).
    #[cfg(test)]
    pub fn push(&mut self, r0: usize, block: ArrayView2<f64>) {
        self.push_known(r0, block, &BlockExtent::of(block));
    }

    /// [`FiniteScan::push`] with the block's extent already taken (in the pass that summed
    /// it): the common case, every value finite, then needs no pass of its own.
    pub fn push_known(&mut self, r0: usize, block: ArrayView2<f64>, extent: &BlockExtent) {
        if extent.all_finite {
            return;
        }
        for ((r, k), v) in block.indexed_iter() {
            if !v.is_finite() {
                self.count += 1;
                self.first.get_or_insert([r0 + r, k]);
            }
        }
    }

    /// `(count, first [r, k])`, if any value was not finite.
    pub fn found(&self) -> Option<(usize, [usize; 2])> {
        self.first.map(|f| (self.count, f))
    }

    /// The message for the non-finite entries, if any.
    pub fn message(&self) -> Option<String> {
        self.found().map(|(n, [r, k])| {
            format!(
                "{n} value(s) are NaN or infinite (first at [realization, time] = [{r}, {k}]); store a finite number at every point, or leave the realization out"
            )
        })
    }
}

/// Finds the finite values of an R × T dataset, read in row blocks, that lie outside
/// `[lo − tol, hi + tol]` (the 2-D form of [`check_in_range`], same message).
#[derive(Debug)]
pub struct RangeScan {
    lo: f64,
    hi: f64,
    tol: f64,
    count: usize,
    first: Option<([usize; 2], f64)>,
    worst: f64,
}

impl RangeScan {
    pub fn new(lo: f64, hi: f64, tol: f64) -> RangeScan {
        RangeScan {
            lo,
            hi,
            tol,
            count: 0,
            first: None,
            worst: 0.0,
        }
    }

    /// Scans `block`, whose first row is realization `r0` (for tests: readers use
    /// `push_known`).
    #[cfg(test)]
    pub fn push(&mut self, r0: usize, block: ArrayView2<f64>) {
        self.push_known(r0, block, &BlockExtent::of(block));
    }

    /// [`RangeScan::push`] with the block's extent already taken. The common case, every
    /// value finite and inside, needs no pass of its own: if the smallest and the largest
    /// value pass the test, every value between them does, because rounded subtraction is
    /// monotone (`lo − v ≤ lo − min` and `v − hi ≤ max − hi` after rounding too).
    pub fn push_known(&mut self, r0: usize, block: ArrayView2<f64>, extent: &BlockExtent) {
        let (lo, hi, tol) = (self.lo, self.hi, self.tol);
        let inside = |v: f64| (lo - v).max(v - hi) <= tol;
        if extent.all_finite && inside(extent.min) && inside(extent.max) {
            return;
        }
        for ((r, k), &v) in block.indexed_iter() {
            if !v.is_finite() {
                continue;
            }
            let excess = (lo - v).max(v - hi);
            if excess > tol {
                self.count += 1;
                self.worst = self.worst.max(excess);
                self.first.get_or_insert(([r0 + r, k], v));
            }
        }
    }

    /// The message for the values outside, if any; `what` names the items.
    pub fn message(&self, what: &str) -> Option<String> {
        self.first.map(|([r, k], v)| {
            range_message(
                self.count,
                what,
                (self.lo, self.hi, self.tol),
                v,
                &format!("[{r}, {k}]"),
                self.worst,
            )
        })
    }
}

fn range_message(
    count: usize,
    what: &str,
    (lo, hi, tol): (f64, f64, f64),
    v: f64,
    at: &str,
    worst: f64,
) -> String {
    format!(
        "{count} {what}(s) lie outside the spectrum [{lo}, {hi}] by more than the tolerance {tol:.3e} (first {v} at {at}, largest excess {worst:.3e}); correct the values or the attributes spectrum_min/spectrum_max"
    )
}

/// The half-width of the tolerance band around a spectrum (see the module header).
pub fn range_tolerance(lo: f64, hi: f64, relative_rounding: f64) -> f64 {
    SPREAD_SLACK * (hi - lo) + ABSOLUTE_SLACK + relative_rounding * lo.abs().max(hi.abs())
}

/// For an observable declared to have two outcomes (`two_outcomes = 1`): the message if some
/// value is not the mean of its shots' outcomes at `lo` and `hi`, i.e. if `shots·(x − lo)/(hi − lo)`
/// is further from an integer than the storage allows. `tol` is the range tolerance of the
/// values ([`range_tolerance`]); a value may be off its exact count by `shots·tol/(hi − lo)`.
/// When that slack reaches 1/4 of a count the counts cannot be told apart, which is a problem
/// of its own (store the values in float64).
pub fn check_outcome_counts(
    values: ArrayView2<f64>,
    shots: impl Fn(usize, usize) -> u64,
    lo: f64,
    hi: f64,
    tol: f64,
) -> Option<String> {
    // A spectrum that is not finite or has `lo > hi` is reported before this check runs.
    if lo >= hi {
        return Some(format!(
            "declares two outcomes but its spectrum [{lo}, {hi}] has one value; remove the attribute two_outcomes or give spectrum_min < spectrum_max"
        ));
    }
    let mut count = 0usize;
    let mut first: Option<([usize; 2], f64, u64)> = None;
    for ((r, k), &x) in values.indexed_iter() {
        let n = shots(r, k);
        let slack = n as f64 * tol / (hi - lo);
        if slack >= 0.25 {
            return Some(format!(
                "declares two outcomes, but with {n} shots (at [realization, time] = [{r}, {k}]) values stored this way cannot tell neighbouring counts apart; store values as float64 or remove the attribute two_outcomes"
            ));
        }
        let (_, off) = crate::model::outcome_count(x, n, lo, hi);
        // `slack` holds 1e-9·shots, far above the rounding of `outcome_count` itself (a few
        // ulps of `shots`). A NaN value (reported by the finiteness scan) compares false.
        if off > slack {
            count += 1;
            first.get_or_insert(([r, k], x, n));
        }
    }
    first.map(|([r, k], x, n)| {
        format!(
            "declares two outcomes (every shot gives {lo} or {hi}), but {count} value(s) are not a mean of such outcomes over their shots (first {x} at [realization, time] = [{r}, {k}] with {n} shots); correct the values or shots, or remove the attribute two_outcomes"
        )
    })
}

/// The message for finite values outside `[lo − tol, hi + tol]`, if any; `what` names the
/// items ("value", "ideal value").
pub fn check_in_range<'a>(
    values: impl Iterator<Item = (String, &'a f64)>,
    lo: f64,
    hi: f64,
    tol: f64,
    what: &str,
) -> Option<String> {
    let mut count = 0usize;
    let mut first: Option<(String, f64)> = None;
    let mut worst = 0.0f64;
    for (at, &v) in values {
        if !v.is_finite() {
            continue;
        }
        let excess = (lo - v).max(v - hi);
        if excess > tol {
            count += 1;
            worst = worst.max(excess);
            if first.is_none() {
                first = Some((at, v));
            }
        }
    }
    first.map(|(at, v)| range_message(count, what, (lo, hi, tol), v, &at, worst))
}

/// Iterates a vector with each entry's position as text.
pub fn indexed_1d(a: ArrayView1<'_, f64>) -> impl Iterator<Item = (String, &f64)> {
    a.into_iter()
        .enumerate()
        .map(|(i, v)| (format!("index {i}"), v))
}

/// Checks a support (sites an operator acts on): every site in `0..n_sites`, no repeats.
/// Returns the sites sorted.
pub fn check_support(sites: &[i128], n_sites: Option<usize>) -> Result<Vec<usize>, String> {
    let mut out = Vec::with_capacity(sites.len());
    for &s in sites {
        let bad_high = n_sites.is_some_and(|n| s >= n as i128);
        if s < 0 || bad_high || s > usize::MAX as i128 {
            return Err(match n_sites {
                Some(n) => format!(
                    "site {s} is outside the lattice (sites are numbered 0 to {}); use 0-based site numbers below n_sites = {n}",
                    n.saturating_sub(1)
                ),
                None => format!("site {s} is negative; use 0-based site numbers"),
            });
        }
        out.push(s as usize);
    }
    out.sort_unstable();
    if let Some(w) = out.windows(2).find(|w| w[0] == w[1]) {
        return Err(format!(
            "site {} is listed twice; list every site once",
            w[0]
        ));
    }
    Ok(out)
}

/// One row of `terms_support`: the sites first, then `-1` padding. Returns the sites sorted.
pub fn parse_term_row(row: &[i128], n_sites: Option<usize>) -> Result<Vec<usize>, String> {
    let len = row.iter().position(|&s| s == -1).unwrap_or(row.len());
    if row[len..].iter().any(|&s| s != -1) {
        return Err(
            "has a site after the -1 padding; list the sites first, then pad with -1".to_string(),
        );
    }
    if len == 0 {
        return Err("lists no site; every term acts on at least one site (fold a constant term into the values instead)".to_string());
    }
    check_support(&row[..len], n_sites)
}

/// `Σ_a |w_a| · max(|min_a|, |max_a|)`: a bound on the operator norm of `Σ_a w_a O_a`
/// (triangle inequality), summed in term order.
pub fn terms_norm_bound(weights: &[f64], spectra: &[[f64; 2]]) -> f64 {
    weights
        .iter()
        .zip(spectra)
        .map(|(w, s)| w.abs() * s[0].abs().max(s[1].abs()))
        .sum()
}

/// docs/run-format.md, "Term structure": the terms' norm bound must bound both `|spectrum_min|` and `|spectrum_max|`
/// (a declared range wider than the terms allow cannot be right). Allows
/// `1e-9·bound + 1e-12` for rounding.
pub fn check_terms_consistent(
    weights: &[f64],
    spectra: &[[f64; 2]],
    lo: f64,
    hi: f64,
) -> Option<String> {
    let bound = terms_norm_bound(weights, spectra);
    let widest = lo.abs().max(hi.abs());
    if widest > bound * (1.0 + TERMS_RELATIVE_SLACK) + ABSOLUTE_SLACK {
        Some(format!(
            "the terms bound the norm of the observable by Σ|w_a|·max(|min_a|, |max_a|) = {bound}, but spectrum [{lo}, {hi}] reaches {widest}; correct the weights, the term spectra or spectrum_min/spectrum_max"
        ))
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    #[test]
    fn names_allow_letters_digits_and_three_marks_only() {
        for ok in ["Z_5", "ZZ-0.1", "n", "X.3", "a1"] {
            assert!(valid_name(ok), "{ok}");
        }
        for bad in ["", "Z 5", "Z/5", "Zé", "a+b", "<Z>"] {
            assert!(!valid_name(bad), "{bad}");
        }
    }

    #[test]
    fn times_must_be_finite_non_negative_and_non_decreasing() {
        assert!(check_times(&[0.0, 0.0, 0.5, 1.0]).is_empty());
        assert_eq!(check_times(&[]).len(), 1);
        let m = check_times(&[0.0, f64::NAN, 1.0]);
        assert!(m[0].contains("index 1"), "{m:?}");
        let m = check_times(&[-0.5, 1.0]);
        assert!(m[0].contains("negative"), "{m:?}");
        let m = check_times(&[0.0, 2.0, 1.0]);
        assert_eq!(m.len(), 1);
        assert!(m[0].contains("decrease at index 2"), "{m:?}");
    }

    #[test]
    fn non_finite_values_are_counted_with_the_first_position() {
        let a = array![
            [0.0, 1.0, f64::NAN],
            [f64::INFINITY, 0.0, f64::NEG_INFINITY]
        ];
        let mut scan = FiniteScan::default();
        scan.push(0, a.view());
        assert_eq!(scan.found(), Some((3, [0, 2])));
        // In two blocks, the second starting at row 1: the same count and first position.
        let mut scan = FiniteScan::default();
        scan.push(0, a.slice(ndarray::s![0..1, ..]));
        scan.push(1, a.slice(ndarray::s![1..2, ..]));
        assert_eq!(scan.found(), Some((3, [0, 2])));
        let mut scan = FiniteScan::default();
        scan.push(0, array![[0.5]].view());
        assert_eq!(scan.found(), None);
    }

    /// The extent a fused pass takes (row by row, per column) is the extent of the block, and
    /// the scans' shortcut on it finds what a value-by-value scan finds, for values on both
    /// sides of the edges of the tolerance, NaN and infinities.
    #[test]
    fn the_extent_shortcut_finds_what_a_full_scan_finds() {
        let (lo, hi) = (-1.0, 1.0);
        let tol = range_tolerance(lo, hi, 0.0);
        let edge = [
            lo - tol,
            hi + tol,
            f64::from_bits((lo - tol).to_bits() + 1),
            f64::from_bits((hi + tol).to_bits() + 1),
            0.25,
            -0.0,
        ];
        let specials = [f64::NAN, f64::INFINITY, f64::NEG_INFINITY];
        for case in 0..200usize {
            let block = ndarray::Array2::from_shape_fn((3, 4), |(r, k)| {
                let i = (case * 7 + r * 5 + k * 3) % 23;
                if case % 5 == 0 && i == 4 {
                    specials[case % 3]
                } else if i < edge.len() && (case / 3) % 2 == 0 {
                    edge[i]
                } else {
                    0.5 * ((i as f64) / 23.0 - 0.5)
                }
            });
            let mut cols = ExtentColumns::new(4);
            for row in block.rows() {
                cols.push_row(row.as_slice().unwrap());
            }
            assert_eq!(cols.extent(), BlockExtent::of(block.view()), "case {case}");
            let mut fast = RangeScan::new(lo, hi, tol);
            fast.push_known(0, block.view(), &cols.extent());
            let outside: Vec<f64> = block
                .iter()
                .copied()
                .filter(|v| v.is_finite() && (lo - v).max(v - hi) > tol)
                .collect();
            assert_eq!(fast.count, outside.len(), "case {case}: {block:?}");
            let mut finite = FiniteScan::default();
            finite.push_known(0, block.view(), &cols.extent());
            let bad = block.iter().filter(|v| !v.is_finite()).count();
            assert_eq!(finite.count, bad, "case {case}");
        }
    }

    #[test]
    fn float32_storage_widens_the_range_tolerance_by_one_rounding() {
        // 0.3 is not a float32; its nearest float32 is 0.300000011920928955078125 (exact value of
        // the binary32 number 0x3E99999A, IEEE 754).
        let v32 = 0.3f32 as f64;
        assert!(v32 > 0.3);
        let tight = range_tolerance(-0.3, 0.3, 0.0);
        let narrow = range_tolerance(-0.3, 0.3, 2f64.powi(-24));
        let excess = v32 - 0.3;
        assert!(excess > tight && excess <= narrow);
        let vals = [v32];
        let it = || vals.iter().enumerate().map(|(i, v)| (format!("{i}"), v));
        assert!(check_in_range(it(), -0.3, 0.3, tight, "value").is_some());
        assert!(check_in_range(it(), -0.3, 0.3, narrow, "value").is_none());
    }

    #[test]
    fn values_outside_the_spectrum_are_reported_with_count_and_worst() {
        let a = array![[0.5, 1.5], [-1.0, 2.0]];
        let mut scan = RangeScan::new(-1.0, 1.0, 1e-12);
        scan.push(0, a.slice(ndarray::s![0..1, ..]));
        scan.push(1, a.slice(ndarray::s![1..2, ..]));
        let m = scan.message("value").unwrap();
        assert!(m.starts_with("2 value(s)"), "{m}");
        assert!(m.contains("first 1.5 at [0, 1]"), "{m}");
        assert!(m.contains("largest excess 1.000e0"), "{m}");
        let mut scan = RangeScan::new(-1.0, 1.0, range_tolerance(-1.0, 1.0, 0.0));
        scan.push(0, array![[1.0 + 1e-13, f64::NAN]].view());
        assert!(scan.message("value").is_none());
        let v = [1.5];
        let it = v.iter().enumerate().map(|(i, x)| (format!("index {i}"), x));
        let m = check_in_range(it, -1.0, 1.0, 1e-12, "ideal value").unwrap();
        assert!(m.contains("first 1.5 at index 0"), "{m}");
    }

    #[test]
    fn supports_are_sorted_and_checked_against_the_lattice() {
        assert_eq!(check_support(&[3, 1, 2], Some(4)), Ok(vec![1, 2, 3]));
        assert!(check_support(&[4], Some(4))
            .unwrap_err()
            .contains("below n_sites = 4"));
        assert!(check_support(&[-1], Some(4)).is_err());
        assert!(check_support(&[1, 1], Some(4))
            .unwrap_err()
            .contains("twice"));
        assert_eq!(check_support(&[], Some(4)), Ok(vec![]));
    }

    #[test]
    fn term_rows_are_sites_then_padding() {
        assert_eq!(parse_term_row(&[2, 0, -1], Some(3)), Ok(vec![0, 2]));
        assert!(parse_term_row(&[-1, 0], Some(3)).is_err());
        assert!(parse_term_row(&[-1, -1], Some(3)).is_err());
        assert!(parse_term_row(&[0, -2], Some(3)).is_err());
    }

    #[test]
    fn magnetisation_terms_bound_the_declared_spectrum() {
        // M = (1/4) Σ_i Z_i on 4 sites: ‖M‖ = 1 exactly (all spins up), and the bound is
        // 4 · 1/4 · 1 = 1.
        let w = [0.25; 4];
        let s = [[-1.0, 1.0]; 4];
        assert_eq!(terms_norm_bound(&w, &s), 1.0);
        assert!(check_terms_consistent(&w, &s, -1.0, 1.0).is_none());
        assert!(check_terms_consistent(&w, &s, -0.5, 0.5).is_none());
        assert!(check_terms_consistent(&w, &s, -1.0, 1.5).is_some());
        // Projector terms [0, 1] with negative weights: |w|·1 each.
        assert!(check_terms_consistent(&[-1.0, 2.0], &[[0.0, 1.0]; 2], -1.0, 2.0).is_none());
    }
}
