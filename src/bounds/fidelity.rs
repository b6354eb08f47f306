//! The fidelity lower bound for one noisy evolution from a pure state (docs/method.md §4).
//!
//! `‖ψ(t) − ψ_g(t)‖ ≤ D(g) = ∫_0^t ‖Δ_g ψ(s)‖ ds` along the ideal trajectory, and
//! `F ≥ (1 − D²/2)²` when `D ≤ √2`. With failure probability `p` (one-sided):
//! `D_p = t (Σ δ_i m_i + √(Σ δ_i² σ_i²) + fluct)`, where the fluctuation of `D` around its
//! mean comes from Gaussian concentration (route G: `√(Σ δ_i² κ_i²) √(2 ln(1/p))`), bounded
//! differences (route D: `√(Σ δ_i² w_i²) √(ln(1/p)/2)`), or the two groups with `p/2` each
//! (an extension of docs/method.md §4 by the same argument as the mixed route of §3,
//! docs/method.md §4; the only route where neither G nor D applies to every source, and a
//! candidate beside them otherwise), the smallest kept. Worst case
//! `D_wc = t Σ δ_i (b_i + m_i)`. Sums are over non-negative terms in instance order. A source
//! drawn again every `τ < t` enters the fluctuation sums with `δ_i √(Σ_w ℓ_w²)/t`.

use super::global::{FluctuationRoute, SourceData};

/// The parts of the fidelity bound at one time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FidelityBound {
    /// `t Σ δ_i m_i`.
    pub d_systematic: f64,
    /// `t √(Σ δ_i² σ_i²)`: the bound on the mean of the random part of `D`.
    pub d_mean: f64,
    /// `t · fluct`, and the route that gave it (`None`: no route, infinite).
    pub d_fluctuation: f64,
    pub route: Option<FluctuationRoute>,
    /// `D_p` (infinite if no route applies).
    pub d_p: f64,
    /// `D_wc` (infinite if a source is unbounded).
    pub d_wc: f64,
    /// `min(D_p, D_wc)`.
    pub d: f64,
    /// `(1 − d²/2)²`, or 0 when vacuous.
    pub f_low: f64,
    /// `d > √2`: the bound says nothing.
    pub vacuous: bool,
}

/// The fidelity lower bound at time `t` with failure probability `p` (one-sided).
pub fn fidelity_bound(sources: &[SourceData], t: f64, p: f64) -> FidelityBound {
    let mut sys = 0.0;
    let mut var = 0.0;
    let mut wc = 0.0;
    let mut k2 = 0.0;
    let mut w2 = 0.0;
    let (mut all_kappa, mut all_width) = (true, true);
    // Candidates for the mixed split: (κ², w²) sums with two-way sources sent to G or to D.
    let mut mixed = [(0.0f64, 0.0f64); 2];
    let mut mixed_ok = true;
    for s in sources {
        let d = s.delta;
        if d <= 0.0 {
            continue;
        }
        let c = &s.constants;
        sys += d * s.systematic;
        var += (d * c.sigma) * (d * c.sigma);
        wc += d * (c.b + s.systematic);
        // A source drawn again every τ < t: `D'` moves by at most `δ ℓ_w` per window, so the
        // sums of squares take `δ √(Σ_w ℓ_w²)/t` in place of `δ` (docs/method.md §4).
        let d = if s.windowed_at(t) {
            d * (super::windows::quadratic_time(s.window, t) / t)
        } else {
            d
        };
        match c.kappa {
            Some(k) => k2 += (d * k) * (d * k),
            None => all_kappa = false,
        }
        if c.width.is_finite() {
            w2 += (d * c.width) * (d * c.width);
        } else {
            all_width = false;
        }
        for (j, both_to_g) in [true, false].into_iter().enumerate() {
            match (c.kappa, c.width.is_finite()) {
                (Some(k), true) if both_to_g => mixed[j].0 += (d * k) * (d * k),
                (Some(_), true) => mixed[j].1 += (d * c.width) * (d * c.width),
                (Some(k), false) => mixed[j].0 += (d * k) * (d * k),
                (None, true) => mixed[j].1 += (d * c.width) * (d * c.width),
                (None, false) => mixed_ok = false,
            }
        }
    }
    let lg = |k2: f64, p: f64| k2.sqrt() * (2.0 * (1.0 / p).ln()).sqrt();
    let ld = |w2: f64, p: f64| w2.sqrt() * (0.5 * (1.0 / p).ln()).sqrt();
    let valid_p = p > 0.0 && p < 1.0;
    let mut best: Option<(f64, FluctuationRoute)> = None;
    let mut consider = |v: f64, r: FluctuationRoute| {
        if best.is_none_or(|(b, _)| v < b) {
            best = Some((v, r));
        }
    };
    if valid_p {
        if all_kappa {
            consider(lg(k2, p), FluctuationRoute::Gaussian);
        }
        if all_width {
            consider(ld(w2, p), FluctuationRoute::BoundedDifferences);
        }
        // The mixed split is a candidate also where G or D applies (as in
        // `global::fluctuation`): otherwise adding a source could lower `D_p`.
        if mixed_ok {
            for (k2m, w2m) in mixed {
                consider(lg(k2m, 0.5 * p) + ld(w2m, 0.5 * p), FluctuationRoute::Mixed);
            }
        }
    }
    let (fluct, route) = match best {
        Some((v, r)) => (v, Some(r)),
        None => (f64::INFINITY, None),
    };
    // At t = 0 no perturbation has acted: D = 0 exactly, also when a factor is infinite
    // (an unbounded family's worst case, or no fluctuation route); 0·∞ must not become NaN.
    let scaled = |x: f64| if t == 0.0 { 0.0 } else { t * x };
    let d_systematic = scaled(sys);
    let d_mean = scaled(var.sqrt());
    let d_fluctuation = scaled(fluct);
    let d_p = d_systematic + d_mean + d_fluctuation;
    let d_wc = scaled(wc);
    let d = d_p.min(d_wc);
    let vacuous = d.is_nan() || d > std::f64::consts::SQRT_2;
    let f_low = if vacuous {
        0.0
    } else {
        let a = 1.0 - 0.5 * d * d;
        a * a
    };
    FidelityBound {
        d_systematic,
        d_mean,
        d_fluctuation,
        route,
        d_p,
        d_wc,
        d,
        f_low,
        vacuous,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Regression: at t = 0 an unbounded family (worst case ∞) gave 0·∞ = NaN, written as
    /// "undefined" in certificates. At t = 0 the state has not moved: F = 1 exactly.
    #[test]
    fn at_time_zero_the_bound_is_one_even_for_unbounded_families() {
        let f = crate::model::noise::Family::Normal { sigma: 1.0 };
        let s = SourceData {
            family: f,
            constants: crate::bounds::family::constants(&f),
            delta: 0.3,
            systematic: 0.0,
            window: None,
        };
        let b = fidelity_bound(&[s], 0.0, 0.01);
        assert_eq!((b.d_wc, b.d_p, b.f_low, b.vacuous), (0.0, 0.0, 1.0, false));
        assert!(fidelity_bound(&[s], 1.0, 0.01).d_wc.is_infinite());
    }
    use crate::bounds::family;
    use crate::model::noise::Family;
    use rand::{Rng, SeedableRng};

    fn src(f: Family, delta: f64) -> SourceData {
        SourceData {
            family: f,
            constants: family::constants(&f),
            delta,
            systematic: 0.0,
            window: None,
        }
    }

    /// Exact check: M two-point sources δ g_i Z on one spin, H = 0, ψ = |+⟩. Then
    /// ψ_g = (e^{−iφ}|0⟩ + e^{iφ}|1⟩)/√2 with φ = δtΣg_i, so F = cos²(φ) exactly. Draws whose
    /// fidelity falls below F_low must be rarer than p allows (one-sided binomial at 0.001;
    /// with 4000 draws and p = 0.05 the allowance is below 240).
    #[test]
    fn exact_fidelity_of_a_dephased_spin_respects_the_bound() {
        let (m, delta, t) = (400usize, 0.001, 1.0);
        let sources = vec![src(Family::TwoPoint, delta); m];
        let p = 0.05;
        let b = fidelity_bound(&sources, t, p);
        assert!(!b.vacuous && b.d < b.d_wc);
        assert_eq!(b.route, Some(FluctuationRoute::BoundedDifferences));
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(7);
        let mut below = 0;
        for _ in 0..4000 {
            let sum: f64 = (0..m)
                .map(|_| if rng.random::<bool>() { 1.0 } else { -1.0 })
                .sum();
            let f = (delta * t * sum).cos().powi(2);
            below += usize::from(f < b.f_low);
        }
        assert!(below < 240, "{below} draws below F_low");
        // The infidelity bound grows like the number of sources (1 − F_low ∝ M at small δt).
        let one = 1.0 - fidelity_bound(&sources[..100], t, p).f_low;
        let four = 1.0 - fidelity_bound(&sources, t, p).f_low;
        assert!((four / one - 4.0).abs() < 0.05, "ratio {}", four / one);
    }

    #[test]
    fn the_bound_is_vacuous_beyond_root_two_and_uses_the_worst_case_when_smaller() {
        let s = vec![src(Family::Uniform, 1.0)];
        let b = fidelity_bound(&s, 10.0, 0.01);
        assert!(b.vacuous && b.f_low == 0.0);
        // One source: D_wc = tδ is below D_p (mean + fluctuation exceed b = 1).
        let b = fidelity_bound(&s, 0.1, 0.01);
        assert!((b.d - 0.1).abs() < 1e-15 && b.d_wc < b.d_p);
        assert!((b.f_low - (1.0 - 0.005f64).powi(2)).abs() < 1e-15);
        // Normal and two-point together: only the mixed route applies.
        let s = vec![
            src(Family::Normal { sigma: 1.0 }, 0.1),
            src(Family::TwoPoint, 0.1),
        ];
        let b = fidelity_bound(&s, 1.0, 0.01);
        assert_eq!(b.route, Some(FluctuationRoute::Mixed));
        assert_eq!(b.d_wc, f64::INFINITY);
        assert!(b.d.is_finite());
    }
}
