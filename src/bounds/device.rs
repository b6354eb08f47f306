//! The device-error terms of docs/method.md §7: incoherent (Markovian) errors, preparation
//! errors and readout errors of one observable at every time. Pure: numbers in, numbers out.
//!
//! Each term is deterministic (it holds for every noise draw, with no share of ε), so at every
//! time the smaller of its global and light-cone forms is used, term by term:
//!
//! * incoherent: `E_inc(t) ≤ s_O Σ_i Γ_i T_i(t)`, `Γ_i = Σ_j γ_j c_j` over the channels on site
//!   `i`; global form `T_i = t`;
//! * preparation: `E_prep(t) ≤ s_O Σ_i ε_i min(1, u_i(t))`; global form without `u_i`;
//!   for a sum of local terms (at most [`MAX_TERMS_BY_TERM`]) both also term by term, with the
//!   light cone of each term's support ([`DeviceTerms::tighten_by_terms`]);
//! * readout: `E_meas ≤ s_O (1 − Π_{i∈X} (1 − p_i))` over the support `X` (all sites for a
//!   global observable); for a sum of local terms also `Σ_a |w_a| s_a (1 − Π_{i∈X_a}(1 − p_i))`,
//!   the smaller used. Only for observables the record declares read in the computational basis.
//!
//! Sites outside the light-cone region are bounded together: `Σ_out Γ_i min(t, n_Y C) ≤
//! min(t Σ Γ_i, C Σ Γ_i n_Y)` with the sums over *all* sites (an upper bound on the sum over
//! the outside ones, without a subtraction that could round below it).
//!
//! Floating point: the sums have non-negative terms in site order (deterministic); each term
//! is multiplied by `1 + (n + 4)·2^{-52}` for `n` summands, which covers the rounding of the
//! sums and products (at most about `n·2^{-53}` relative). `1 − Π(1 − p_i)` is
//! `−expm1(Σ ln_1p(−p_i))`, accurate for small `p_i` where the product form would cancel.

use super::light_cone::SiteCone;
use crate::model::device::{AppliesTo, DeviceModel};
use crate::model::Terms;

/// The per-run sums of the device errors over every site.
#[derive(Debug, Clone)]
pub struct DeviceData {
    /// Per site `Γ_i`, with `(Σ Γ_i, Σ Γ_i n_Y(i))`.
    incoherent: Option<(Vec<f64>, f64, f64)>,
    /// Per site `ε_i`, with `(Σ ε_i, Σ ε_i n_Y(i))`.
    preparation: Option<(Vec<f64>, f64, f64)>,
    readout: Option<(Vec<f64>, AppliesTo)>,
}

/// The device terms of one observable, per time.
#[derive(Debug, Clone, PartialEq)]
pub struct DeviceTerms {
    /// `E_inc(t)`, when the record has an `incoherent` section.
    pub incoherent: Option<Vec<f64>>,
    /// `E_prep(t)`, when the record has a `preparation` section.
    pub preparation: Option<Vec<f64>>,
    /// The readout section's verdict for this observable.
    pub readout: ReadoutTerm,
    /// Whether the light-cone form was computed (it is used at a time where it is smaller).
    pub light_cone: bool,
    /// `E_inc + E_prep + E_meas` per time (before the cap at `s_O`).
    pub total: Vec<f64>,
}

/// The readout term of one observable.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ReadoutTerm {
    /// The record has no readout section.
    Absent,
    /// The record has one, but does not declare this observable read in the computational
    /// basis: readout errors are not covered for it.
    NotDeclared,
    /// `E_meas` (the same at every time).
    Bound(f64),
}

impl ReadoutTerm {
    /// `E_meas`, 0 where the record has no readout section or does not cover the observable.
    pub fn value(self) -> f64 {
        match self {
            ReadoutTerm::Bound(e) => e,
            _ => 0.0,
        }
    }
}

/// `E_inc + E_prep + E_meas` at each of `n` times, in that order (absent terms count 0).
fn sum_per_time(
    incoherent: &Option<Vec<f64>>,
    preparation: &Option<Vec<f64>>,
    meas: f64,
    n: usize,
) -> Vec<f64> {
    (0..n)
        .map(|k| {
            incoherent.as_ref().map_or(0.0, |v| v[k])
                + preparation.as_ref().map_or(0.0, |v| v[k])
                + meas
        })
        .collect()
}

/// `e + d` capped at the spread `s_o`: how every error bound takes a device term (docs/method.md
/// §7), in the bounds, the ideal-reference test and planning alike.
pub fn add_device(e: f64, d: f64, s_o: f64) -> f64 {
    (e + d).min(s_o)
}

/// `1 + (n + 4)·2^{-52}`: the margin of a sum of `n` non-negative terms (module header).
fn margin(n: usize) -> f64 {
    1.0 + (n as f64 + 4.0) * f64::EPSILON
}

/// `(Σ v_i, Σ v_i n_y(i))`, each rounded up.
fn totals(v: &[f64], n_y: &[u32]) -> (f64, f64) {
    let s: f64 = v.iter().sum();
    let w: f64 = v.iter().zip(n_y).map(|(&x, &n)| x * n as f64).sum();
    let m = margin(v.len());
    (s * m, w * m)
}

impl DeviceData {
    /// The per-run sums; `n_y[i]` is the number of bonds meeting site `i`.
    pub fn new(model: &DeviceModel, n_y: &[u32]) -> DeviceData {
        let with_totals = |v: &Vec<f64>| {
            let (s, w) = totals(v, n_y);
            (v.clone(), s, w)
        };
        DeviceData {
            incoherent: model.incoherent.as_ref().map(with_totals),
            preparation: model.preparation.as_ref().map(with_totals),
            readout: model.readout.clone(),
        }
    }

    /// Whether the light-cone forms are wanted (there is an incoherent or preparation term).
    pub fn wants_cone(&self) -> bool {
        self.incoherent.is_some() || self.preparation.is_some()
    }

    /// The device terms of an observable `name` of spread `s_o` on `support` (empty: global)
    /// at `times`, with its `cone` when computed.
    pub fn observable(
        &self,
        name: &str,
        s_o: f64,
        support: &[usize],
        terms: Option<&Terms>,
        times: &[f64],
        cone: Option<&SiteCone>,
    ) -> DeviceTerms {
        let incoherent = self.incoherent.as_ref().map(|(rates, total, total_ny)| {
            times
                .iter()
                .enumerate()
                .map(|(k, &t)| {
                    let global = s_o * (t * total);
                    match cone {
                        Some(c) => {
                            global.min(incoherent_cone(s_o, rates, *total, *total_ny, c, k, t))
                        }
                        None => global,
                    }
                })
                .collect::<Vec<f64>>()
        });
        let preparation = self.preparation.as_ref().map(|(eps, total, total_ny)| {
            (0..times.len())
                .map(|k| {
                    let global = s_o * total;
                    match cone {
                        Some(c) => global.min(preparation_cone(s_o, eps, *total, *total_ny, c, k)),
                        None => global,
                    }
                })
                .collect::<Vec<f64>>()
        });
        let readout = match &self.readout {
            None => ReadoutTerm::Absent,
            Some((_, applies)) if !applies.covers(name) => ReadoutTerm::NotDeclared,
            Some((p, _)) => ReadoutTerm::Bound(readout_bound(s_o, p, support, terms)),
        };
        let meas = readout.value();
        let total = sum_per_time(&incoherent, &preparation, meas, times.len());
        DeviceTerms {
            incoherent,
            preparation,
            readout,
            light_cone: cone.is_some(),
            total,
        }
    }
}

/// `s_O (Σ_{region} Γ_i T_i(t_k) + min(t Σ Γ, C(t_k) Σ Γ n_Y))`.
fn incoherent_cone(
    s_o: f64,
    rates: &[f64],
    total: f64,
    total_ny: f64,
    cone: &SiteCone,
    k: usize,
    t: f64,
) -> f64 {
    let inside: f64 = cone
        .region
        .iter()
        .zip(cone.exposure_at(k))
        .map(|(s, &e)| rates[s.instance] * e)
        .sum();
    let outside = (t * total).min(cone.tail_exposure(k) * total_ny);
    s_o * (inside * margin(cone.region.len()) + outside)
}

/// `s_O (Σ_{region} ε_i min(1, u_i(t_k)) + min(Σ ε, tail_u(t_k) Σ ε n_Y))`.
fn preparation_cone(
    s_o: f64,
    eps: &[f64],
    total: f64,
    total_ny: f64,
    cone: &SiteCone,
    k: usize,
) -> f64 {
    let inside: f64 = cone
        .region
        .iter()
        .zip(cone.u_at(k))
        .map(|(s, &u)| eps[s.instance] * u)
        .sum();
    let outside = total.min(cone.tail_u(k) * total_ny);
    s_o * (inside * margin(cone.region.len()) + outside)
}

/// `1 − Π_{i∈sites}(1 − p_i)` as `−expm1(Σ ln_1p(−p_i))`, rounded up, at most 1.
pub fn any_flip(p: &[f64], sites: impl Iterator<Item = usize>) -> f64 {
    let mut n = 0usize;
    let ln: f64 = sites
        .map(|i| {
            n += 1;
            (-p[i]).ln_1p()
        })
        .sum();
    (-ln.exp_m1() * margin(n)).min(1.0)
}

/// `E_meas` of an observable on `support` (empty: every site), the smaller of the whole-support
/// and term-by-term forms when it is a sum of local terms.
pub fn readout_bound(s_o: f64, p: &[f64], support: &[usize], terms: Option<&Terms>) -> f64 {
    let whole = if support.is_empty() {
        s_o * any_flip(p, 0..p.len())
    } else {
        s_o * any_flip(p, support.iter().copied())
    };
    let Some(t) = terms else {
        return whole;
    };
    let by_term: f64 = t
        .supports
        .iter()
        .zip(&t.weights)
        .zip(&t.spectra)
        .map(|((sites, w), [lo, hi])| w.abs() * (hi - lo) * any_flip(p, sites.iter().copied()))
        .sum();
    whole.min(by_term * margin(t.supports.len()))
}

/// The global forms of the device terms, for planning (`budget`): `Σ_i Γ_i`, `Σ_i ε_i` and
/// `1 − Π_i(1 − p_i)` over every site, each rounded up as [`DeviceData`] rounds them, so that
/// [`GlobalDevice::term`] of a global observable is the certificate's global device term.
/// All zero without device sections.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct GlobalDevice {
    /// `Σ_i Γ_i`, per the run's time unit.
    pub rate_sum: f64,
    /// `Σ_i ε_i`.
    pub preparation_sum: f64,
    /// `1 − Π_i (1 − p_i)` over every site (the readout term of an observable read on all of
    /// them, per unit of spread).
    pub readout_any: f64,
    /// Number of sites.
    pub sites: usize,
}

impl GlobalDevice {
    /// The sums of a device model (every site).
    pub fn new(model: &DeviceModel) -> GlobalDevice {
        let sum = |v: &Vec<f64>| v.iter().sum::<f64>() * margin(v.len());
        let sites = [
            model.incoherent.as_ref().map(Vec::len),
            model.preparation.as_ref().map(Vec::len),
            model.readout.as_ref().map(|(p, _)| p.len()),
        ]
        .into_iter()
        .flatten()
        .max()
        .unwrap_or(0);
        GlobalDevice {
            rate_sum: model.incoherent.as_ref().map_or(0.0, sum),
            preparation_sum: model.preparation.as_ref().map_or(0.0, sum),
            readout_any: model
                .readout
                .as_ref()
                .map_or(0.0, |(p, _)| any_flip(p, 0..p.len())),
            sites,
        }
    }

    /// Whether every term is zero (no device sections, or all their values 0).
    pub fn is_zero(&self) -> bool {
        self.rate_sum == 0.0 && self.preparation_sum == 0.0 && self.readout_any == 0.0
    }

    /// `[E_inc, E_prep, E_meas]` at time `t` for spread `s_o`, global forms.
    pub fn terms(&self, s_o: f64, t: f64) -> [f64; 3] {
        [
            s_o * (t * self.rate_sum),
            s_o * self.preparation_sum,
            s_o * self.readout_any,
        ]
    }

    /// `E_inc + E_prep + E_meas` at time `t` for spread `s_o`, global forms, in the order the
    /// certificate adds them.
    pub fn term(&self, s_o: f64, t: f64) -> f64 {
        let [inc, prep, meas] = self.terms(s_o, t);
        inc + prep + meas
    }

    /// The same sums with `Σ Γ_i` replaced by `rate_sum`.
    pub fn with_rate_sum(self, rate_sum: f64) -> GlobalDevice {
        GlobalDevice { rate_sum, ..self }
    }
}

/// Most terms of a sum for which the term-by-term forms are computed (one light cone each).
pub const MAX_TERMS_BY_TERM: usize = 256;

impl DeviceTerms {
    /// Tightens the incoherent and preparation terms of a sum `Σ_a w_a O_a` with the
    /// term-by-term forms `Σ_a |w_a| s_a (…)_a` (docs/method.md §7.1–7.2), given the terms of
    /// each `O_a` computed with spread 1 (`per_term[a]`) and the factors `|w_a| s_a`: at each
    /// time the smaller of the whole-support and term-by-term values is kept. Valid because
    /// the change of the expectation of a sum is at most the sum of the changes of its terms,
    /// each bounded for every draw.
    pub fn tighten_by_terms(&mut self, per_term: &[DeviceTerms], factors: &[f64]) {
        let m = margin(per_term.len());
        let by = |pick: fn(&DeviceTerms) -> Option<&Vec<f64>>, k: usize| -> Option<f64> {
            let mut sum = 0.0;
            for (t, f) in per_term.iter().zip(factors) {
                sum += f * pick(t)?.get(k)?;
            }
            Some(sum * m)
        };
        let n = self.total.len();
        if let Some(inc) = &mut self.incoherent {
            for (k, v) in inc.iter_mut().enumerate().take(n) {
                if let Some(b) = by(|t| t.incoherent.as_ref(), k) {
                    *v = v.min(b);
                }
            }
        }
        if let Some(prep) = &mut self.preparation {
            for (k, v) in prep.iter_mut().enumerate().take(n) {
                if let Some(b) = by(|t| t.preparation.as_ref(), k) {
                    *v = v.min(b);
                }
            }
        }
        self.total = sum_per_time(&self.incoherent, &self.preparation, self.readout.value(), n);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The readout bound against exact enumeration of flip patterns: for the observable
    /// `Z_0 Z_1 Z_2` (spread 2) read with independent, state-dependent flips, every true
    /// outcome string and every flip pattern is enumerated; the largest change of the recorded
    /// mean over all true distributions (point masses suffice, the change being linear in
    /// the distribution) is at most `s_O (1 − Π(1 − p_i))` with `p_i = max(p01, p10)`.
    #[test]
    fn readout_bound_holds_against_exact_enumeration() {
        let p01 = [0.02, 0.05, 0.01];
        let p10 = [0.04, 0.01, 0.03];
        let p: Vec<f64> = p01
            .iter()
            .zip(&p10)
            .map(|(a, b): (&f64, &f64)| a.max(*b))
            .collect();
        let bound = readout_bound(2.0, &p, &[0, 1, 2], None);
        let parity = |x: usize| if x.count_ones() % 2 == 0 { 1.0 } else { -1.0 };
        let mut worst = 0.0f64;
        for truth in 0..8usize {
            let mut recorded = 0.0;
            for flips in 0..8usize {
                let mut prob = 1.0;
                for i in 0..3 {
                    let bit = (truth >> i) & 1;
                    let q = if bit == 0 { p01[i] } else { p10[i] };
                    prob *= if (flips >> i) & 1 == 1 { q } else { 1.0 - q };
                }
                recorded += prob * parity(truth ^ flips);
            }
            worst = worst.max((recorded - parity(truth)).abs());
        }
        assert!(worst <= bound, "{worst} > {bound}");
        // The bound is the closed form: 2 (1 − 0.96·0.95·0.97) (arithmetic by hand).
        assert!((bound - 2.0 * (1.0 - 0.96 * 0.95 * 0.97)).abs() < 1e-15);
        // The worst case is attained within a factor 2 here (the parity flips whenever an odd
        // number of sites flip, so the change is 2·P(odd flips) ≈ 2·(1 − Π)).
        assert!(worst > 0.5 * bound);
    }

    /// Term by term: a sum of one-site terms `Σ_i Z_i / 3` has `E ≤ Σ (2/3) p_i`, smaller than
    /// the whole support's `2 (1 − Π(1 − p_i))`.
    #[test]
    fn readout_term_by_term_is_used_when_smaller() {
        let p = [0.01, 0.02, 0.03];
        let terms = Terms {
            supports: vec![vec![0], vec![1], vec![2]],
            weights: vec![1.0 / 3.0; 3],
            spectra: vec![[-1.0, 1.0]; 3],
        };
        let whole = readout_bound(2.0, &p, &[0, 1, 2], None);
        let by_term = readout_bound(2.0, &p, &[0, 1, 2], Some(&terms));
        assert!(by_term < whole);
        assert!((by_term - 2.0 / 3.0 * 0.06).abs() < 1e-15);
    }

    /// The global device term is the certificate's global form of each term: for a global
    /// observable of spread 2 on three sites, E_inc = 2·t·ΣΓ, E_prep = 2·Σε and
    /// E_meas = 2·(1 − Π(1 − p)), checked against [`DeviceData::observable`] without a cone.
    #[test]
    fn the_global_device_term_equals_the_certificates_global_form() {
        let model = DeviceModel {
            incoherent: Some(vec![0.01, 0.02, 0.03]),
            preparation: Some(vec![0.001, 0.002, 0.0]),
            readout: Some((vec![0.01, 0.0, 0.02], AppliesTo::All)),
        };
        let g = GlobalDevice::new(&model);
        let data = DeviceData::new(&model, &[1, 2, 1]);
        let times = [0.0, 0.5, 2.0];
        let d = data.observable("O", 2.0, &[], None, &times, None);
        for (k, &t) in times.iter().enumerate() {
            assert_eq!(g.term(2.0, t), d.total[k], "t = {t}");
        }
        assert!(
            (g.term(2.0, 2.0) - (2.0 * 2.0 * 0.06 + 2.0 * 0.003 + 2.0 * (1.0 - 0.99 * 0.98))).abs()
                < 1e-14
        );
        assert!(GlobalDevice::default().is_zero() && !g.is_zero());
        assert_eq!(g.sites, 3);
    }

    #[test]
    fn any_flip_is_accurate_for_tiny_probabilities() {
        // 1 − (1 − 1e−12)^3 = 3e−12 − 3e−24 + …; the product form would lose 4 digits.
        let v = any_flip(&[1e-12; 3], 0..3);
        assert!((v - (3e-12 - 3e-24)).abs() < 1e-26, "{v}");
        assert_eq!(any_flip(&[1.0, 0.5], 0..2), 1.0);
        assert_eq!(any_flip(&[0.0], 0..1), 0.0);
    }
}
