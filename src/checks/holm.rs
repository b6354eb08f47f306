//! Holm's step-down correction for many tests (Holm 1979, "A simple sequentially rejective
//! multiple test procedure", Scandinavian Journal of Statistics 6, 65–70).
//!
//! The consistency checks run one test per observable and time, so some would fail by chance
//! at any fixed per-test level. Holm's procedure keeps the probability of any false rejection
//! (the family-wise error rate) at or below the check level under any dependence between the
//! tests, and rejects at least as much as Bonferroni. In adjusted form: sort the `m` p-values,
//! `p_(1) ≤ … ≤ p_(m)`; the adjusted value of the j-th is `max_{i ≤ j} min(1, (m − i + 1)
//! p_(i))`, and a test is rejected at level `a` exactly when its adjusted value is `≤ a`.

/// Holm-adjusted p-values, in the order of the input.
///
/// Ties keep their input order (a stable sort), which does not change the adjusted values.
/// A NaN p-value is treated as 1 (no evidence). Each product `(m − i + 1)·p` is one rounding;
/// the running maximum is exact.
pub fn holm_adjust(p: &[f64]) -> Vec<f64> {
    let m = p.len();
    let clean: Vec<f64> = p
        .iter()
        .map(|&x| if x.is_nan() { 1.0 } else { x.clamp(0.0, 1.0) })
        .collect();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&a, &b| clean[a].total_cmp(&clean[b]));
    let mut adjusted = vec![1.0; m];
    let mut running: f64 = 0.0;
    for (j, &i) in order.iter().enumerate() {
        let factor = (m - j) as f64;
        running = running.max((factor * clean[i]).min(1.0));
        adjusted[i] = running;
    }
    adjusted
}

/// Which hypotheses Holm's procedure rejects at family-wise level `level`.
pub fn holm_reject(p: &[f64], level: f64) -> Vec<bool> {
    holm_adjust(p).into_iter().map(|a| a <= level).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The worked example of the Wikipedia article "Holm–Bonferroni method" (four hypotheses,
    /// p = 0.01, 0.04, 0.03, 0.005, α = 0.05: H4 is rejected against 0.05/4, H1 against
    /// 0.05/3, then H3 fails against 0.05/2 and the procedure stops). The numbers are recalled
    /// from memory of that article; the adjusted values are confirmed by statsmodels (fixture).
    #[test]
    fn the_four_hypothesis_worked_example() {
        let p = [0.01, 0.04, 0.03, 0.005];
        assert_eq!(holm_reject(&p, 0.05), [true, false, false, true]);
        let adj = holm_adjust(&p);
        let want = [0.03, 0.06, 0.06, 0.02];
        for (a, w) in adj.iter().zip(want) {
            assert!((a - w).abs() < 1e-15, "{adj:?}");
        }
    }

    /// `statsmodels.stats.multitest.multipletests(method="holm")` on fixed lists
    /// (tests/reference/checks/make_fixtures.py).
    #[test]
    fn adjusted_values_match_statsmodels() {
        let text = include_str!("../../tests/reference/checks/holm.json");
        let v: serde_json::Value = serde_json::from_str(text).unwrap();
        for case in v["cases"].as_array().unwrap() {
            let p: Vec<f64> = case["p"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect();
            let alpha = case["alpha"].as_f64().unwrap();
            let adj = holm_adjust(&p);
            for (k, (a, w)) in adj
                .iter()
                .zip(case["adjusted"].as_array().unwrap())
                .enumerate()
            {
                let w = w.as_f64().unwrap();
                assert!((a - w).abs() <= 1e-14 * w, "{p:?}[{k}]: {a} vs {w}");
            }
            let rej = holm_reject(&p, alpha);
            let want: Vec<bool> = case["reject"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_bool().unwrap())
                .collect();
            assert_eq!(rej, want, "{p:?}");
        }
    }

    #[test]
    fn empty_nan_and_single_inputs() {
        assert!(holm_adjust(&[]).is_empty());
        assert_eq!(holm_adjust(&[f64::NAN, 0.01]), [1.0, 0.02]);
        assert_eq!(holm_adjust(&[0.3]), [0.3]);
        assert_eq!(holm_adjust(&[0.6, 0.7]), [1.0, 1.0]);
    }
}
