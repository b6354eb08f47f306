//! The ideal-reference test's half-width `E_avg(ε) + E_shot(ε)` as a cheap function of ε, and
//! its p-value.
//!
//! `E_wc`, `E_sys` and `E_bias` do not depend on ε; the fluctuation term is a route constant
//! times `√ln(2/p)` (or the mixed route's sum of two such terms) and the shot term a constant
//! times `√ln(2/α)` (Hoeffding) or a normal quantile. So the terms are computed once per point
//! ([`HalfWidth::new`]) and each ε costs a few logarithms and square roots instead of a full
//! [`crate::bounds::global::evaluate_point`] over all sources. [`HalfWidth::at`] performs the
//! operations of `evaluate_point` in the same order, so it returns the same half-width bit
//! for bit (tested below), and the bisection takes the same path.

use super::columns::ShotSum;
use crate::bounds::device::add_device;
use crate::bounds::global::{
    averaged_fluctuation, bias_from_ln_sum, cap, fluctuation_scale, fluctuation_sensitivities,
    systematic, worst_case, FluctuationScale, SourceData,
};
use crate::model::noise::Redrawn;

/// The smallest p-value the ideal-reference bisection resolves (reported as this bound).
pub const SMALLEST_P: f64 = 1e-300;
/// Bisection steps on ln ε for the ideal-reference p-value: 690/2⁴⁰ ≈ 6e-10 relative.
const BISECTION_STEPS: usize = 40;

/// The ε-independent terms of one point's global bounds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HalfWidth {
    s_o: f64,
    e_wc: f64,
    /// `E_sys + E_bias`.
    sys_bias: f64,
    scale: FluctuationScale,
    redrawn: Redrawn,
    realizations: usize,
    shots: ShotSum,
    /// The device-error term at this time (docs/method.md §7), added to `E_avg` with the sum
    /// capped at `s_O`, as the bounds add it; `None` without device sections.
    device: Option<f64>,
}

impl HalfWidth {
    /// The terms at one point with global sensitivities `sens` (`s_O·t` for every source),
    /// `bias_ln_sum` = [`crate::bounds::global::bias_ln_sum`] at this time.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        s_o: f64,
        t: f64,
        sources: &[SourceData],
        sens: &[f64],
        bias_ln_sum: f64,
        redrawn: Redrawn,
        realizations: usize,
        shots: ShotSum,
    ) -> HalfWidth {
        let e_wc = worst_case(sources, sens);
        let e_sys = systematic(sources, sens);
        let e_bias = bias_from_ln_sum(s_o, bias_ln_sum);
        HalfWidth {
            s_o,
            e_wc,
            sys_bias: e_sys + e_bias,
            // Windowed sources: their fluctuation sensitivities (docs/method.md §3).
            scale: fluctuation_scale(sources, &fluctuation_sensitivities(sources, sens, s_o, t)),
            redrawn,
            realizations,
            shots,
            device: None,
        }
    }

    /// The same terms with the device-error term `d` added to `E_avg` (capped at `s_O`).
    pub fn with_device(self, d: Option<f64>) -> HalfWidth {
        HalfWidth { device: d, ..self }
    }

    /// `E_avg(ε) + E_shot(ε)`, pointwise, with the default split of ε (equal halves, or all
    /// to the shot term when the noise is redrawn every shot).
    pub fn at(&self, eps: f64) -> f64 {
        let (p, alpha) = match self.redrawn {
            Redrawn::EveryShot => (0.0, eps),
            _ => (0.5 * eps, 0.5 * eps),
        };
        let fluct = match self.redrawn {
            Redrawn::EveryShot => 0.0,
            _ => {
                let r = self.scale.at(p);
                averaged_fluctuation(self.redrawn, r.value, self.realizations).unwrap_or(0.0)
            }
        };
        let e_avg = cap(self.s_o, self.e_wc, self.sys_bias + fluct);
        let e_avg = match self.device {
            Some(d) => add_device(e_avg, d, self.s_o),
            None => e_avg,
        };
        e_avg + self.shots.term(self.s_o, self.realizations, alpha)
    }

    /// The smallest ε in `[SMALLEST_P, 1]` whose interval excludes a deviation `dev` (the
    /// half-width decreases with ε); 1 when even ε = 1 does not. Bisection on ln ε, returned
    /// from the rejecting side of the bracket, so it never understates the p-value by more
    /// than the bracket.
    pub fn p_value(&self, dev: f64) -> f64 {
        if dev.is_nan() || dev <= self.at(1.0) {
            return 1.0;
        }
        if dev > self.at(SMALLEST_P) {
            return SMALLEST_P;
        }
        let (mut lo, mut hi) = (SMALLEST_P.ln(), 0.0f64);
        for _ in 0..BISECTION_STEPS {
            let mid = 0.5 * (lo + hi);
            if dev > self.at(mid.exp()) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        hi.exp().min(1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bounds::family;
    use crate::bounds::global::{
        bias_ln_sum, evaluate_point, global_sensitivities, PointInputs, ShotData,
    };
    use crate::model::noise::Family;

    fn source(f: Family, delta: f64, m: f64) -> SourceData {
        SourceData {
            family: f,
            constants: family::constants(&f),
            delta,
            systematic: m,
            window: None,
        }
    }

    /// The half-width as it was computed before: a full `evaluate_point` per ε.
    fn reference(
        s_o: f64,
        t: f64,
        sources: &[SourceData],
        redrawn: Redrawn,
        shots: ShotData,
        r: usize,
        eps: f64,
    ) -> f64 {
        let (p, alpha) = match redrawn {
            Redrawn::EveryShot => (0.0, eps),
            _ => (0.5 * eps, 0.5 * eps),
        };
        evaluate_point(&PointInputs {
            s_o,
            t,
            sources,
            sensitivities: None,
            redrawn,
            realizations: r,
            shots,
            p,
            alpha,
            p_single: eps,
        })
        .half_width
    }

    /// Against the full evaluation, bit for bit: the three redraw modes, shot counts and
    /// standard errors, a record with every family (mixed route, unbounded worst case) and
    /// a bounded one, t = 0 and times where the cap at s_O or at E_wc decides.
    #[test]
    fn the_cheap_half_width_is_evaluate_points_bit_for_bit() {
        let bounded = vec![
            source(Family::Uniform, 0.02, 0.0),
            source(Family::TwoPoint, 0.01, 0.003),
            source(
                Family::TruncatedNormal {
                    sigma: 1.0,
                    cutoff: 3.0,
                },
                0.015,
                0.0,
            ),
        ];
        let mixed = vec![
            source(Family::Normal { sigma: 0.5 }, 0.01, 0.1),
            source(
                Family::Bounded {
                    lower: -1.0,
                    upper: 2.0,
                    std: 0.7,
                    symmetric: false,
                },
                0.01,
                0.0,
            ),
            source(Family::Uniform, 0.03, 0.0),
        ];
        let counts = [100u64, 250, 80, 120];
        let se = [0.01, 0.02, 0.015, 0.012];
        let inv_sum = counts.iter().fold(0.0, |a, &s| a + 1.0 / s as f64);
        let sq_sum = se.iter().fold(0.0, |a, &x| a + x * x);
        let r = counts.len();
        let mut checked = 0;
        for sources in [&bounded, &mixed] {
            for &t in &[0.0, 0.7, 5.0, 400.0] {
                let sens = global_sensitivities(sources.len(), 2.0, t);
                let ln = bias_ln_sum(sources, t);
                for redrawn in [Redrawn::EveryShot, Redrawn::EveryRealization, Redrawn::Once] {
                    let cases = [
                        (
                            ShotSum::Counts {
                                inv_sum,
                                any_zero: false,
                            },
                            ShotData::Counts(&counts),
                        ),
                        (ShotSum::StdErr { sq_sum }, ShotData::StdErr(&se)),
                    ];
                    for (sum, data) in cases {
                        let hw = HalfWidth::new(2.0, t, sources, &sens, ln, redrawn, r, sum);
                        for &eps in &[1.0, 0.3, 1e-3, 1e-12, 1e-300] {
                            let want = reference(2.0, t, sources, redrawn, data, r, eps);
                            assert_eq!(hw.at(eps).to_bits(), want.to_bits(), "t={t} ε={eps}");
                            checked += 1;
                        }
                    }
                }
            }
        }
        assert_eq!(checked, 2 * 4 * 3 * 2 * 5);
    }

    /// The p-value is the ε at which the interval just excludes the deviation: the half-width
    /// there equals the deviation (to the bracket's resolution); 1 inside the ε = 1 interval,
    /// the floor beyond the ε = 1e-300 one.
    #[test]
    fn the_p_value_is_where_the_half_width_reaches_the_deviation() {
        let sources = [source(Family::Uniform, 0.05, 0.0)];
        let sens = global_sensitivities(1, 2.0, 1.0);
        let shots = ShotSum::Counts {
            inv_sum: 20.0 / 100.0,
            any_zero: false,
        };
        let hw = HalfWidth::new(
            2.0,
            1.0,
            &sources,
            &sens,
            bias_ln_sum(&sources, 1.0),
            Redrawn::EveryRealization,
            20,
            shots,
        );
        let dev = 0.5 * hw.at(1e-6);
        let p = hw.p_value(dev);
        assert!(p > 1e-6 && p < 1.0);
        assert!((hw.at(p) / dev - 1.0).abs() < 1e-6);
        assert!(dev > hw.at(p), "p must be on the rejecting side");
        assert_eq!(hw.p_value(0.0), 1.0);
        assert_eq!(hw.p_value(f64::NAN), 1.0);
        assert_eq!(hw.p_value(10.0 * hw.at(SMALLEST_P)), SMALLEST_P);
    }
}
