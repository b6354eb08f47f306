//! Rehearsing device errors: the realizations of a scenario whose noise record has device
//! sections (docs/noise-record.md, "Version 2"), evolved as density matrices
//! ([`super::lindblad`]).
//!
//! The device errors simulated are the record's **central values** (no uncertainty added), so
//! the truth lies inside what the record declares:
//!
//! * incoherent: each channel's jump at its `rate`; a T1/T2 channel as decay at `1/T1` (no
//!   excitation: a qubit relaxing to `|0⟩`) plus dephasing at `max(0, 1/T2 − 1/(2 T1))/2`
//!   (docs/method.md §7.1);
//! * preparation: site `i` starts in `(1 − q_i)|ψ_i⟩⟨ψ_i| + q_i X|ψ_i⟩⟨ψ_i|X` with `q_i` its
//!   declared trace distance (at most 1), whose trace distance from `|ψ_i⟩⟨ψ_i|` is
//!   `q_i √(1 − ⟨ψ_i|X|ψ_i⟩²) ≤ q_i`;
//! * readout: for an observable that `readout.applies_to` covers, every shot's recorded bit of
//!   a measured site flips with its declared `flip_0_to_1` or `flip_1_to_0`, independently;
//!   other observables are read without flips.
//!
//! The exact value of a realization is the expectation of the *recorded* outcome (jumps,
//! preparation and flips included). Random numbers of one realization: the noise draws
//! (instance order), then per time, per observable (name order), its shots (a binomial count
//! for a Pauli product; for a sum, the basis states, then per shot one uniform per measured
//! site in site order when the readout applies).

use num_complex::Complex64;

use super::hamiltonian::PauliSum;
use super::lindblad::{evolve_density, recorded_parity, Density, Jumps};
use super::run::{noisy_operator, site_ket, Compiled, RealizationResult, Stats, TrueInstance};
use super::sample;
use crate::inputs::scenario::{Scenario, SiteState};
use crate::model::device::{ChannelSpec, DeviceRecord, Jump, SiteSet};
use crate::model::units::TimeUnit;
use crate::model::Redrawn;

/// The device errors of a record on `n` sites, central values, in the run's time unit.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct DeviceTruth {
    pub jumps: Jumps,
    /// Per site, the flip probability of the preparation.
    pub preparation: Vec<f64>,
    /// Per site, `(p(0→1), p(1→0))`, and whether each observable (scenario order) is read
    /// with them.
    pub readout: Vec<(f64, f64)>,
    pub readout_applies: Vec<bool>,
}

fn sites(set: &SiteSet, n: usize) -> Vec<usize> {
    match set {
        SiteSet::EachSite => (0..n).collect(),
        SiteSet::Sites(v) => v.iter().copied().filter(|&s| s < n).collect(),
    }
}

impl DeviceTruth {
    /// The central values of `record` on `n` sites for the observables `names`.
    pub fn new(record: &DeviceRecord, n: usize, time_unit: TimeUnit, names: &[&str]) -> Self {
        let mut t = DeviceTruth {
            preparation: vec![0.0; n],
            readout: vec![(0.0, 0.0); n],
            readout_applies: vec![false; names.len()],
            ..Default::default()
        };
        for c in record.incoherent.iter().flatten() {
            for s in sites(&c.acts_on, n) {
                match &c.spec {
                    ChannelSpec::Rate {
                        jump, rate, unit, ..
                    } => t
                        .jumps
                        .list
                        .push((s, *jump, rate * unit.factor_to(time_unit))),
                    ChannelSpec::Times { t1, t2, unit, .. } => {
                        let f = time_unit.factor_to(*unit);
                        t.jumps.list.push((s, Jump::Decay, f / t1));
                        let z = (1.0 / t2 - 0.5 / t1).max(0.0) * 0.5 * f;
                        if z > 0.0 {
                            t.jumps.list.push((s, Jump::Dephasing, z));
                        }
                    }
                }
            }
        }
        for p in record.preparation.iter().flatten() {
            for s in sites(&p.acts_on, n) {
                t.preparation[s] = (t.preparation[s] + p.trace_distance).min(1.0);
            }
        }
        if let Some(r) = &record.readout {
            for e in &r.entries {
                for s in sites(&e.acts_on, n) {
                    let (a, b) = t.readout[s];
                    t.readout[s] = ((a + e.flip_0_to_1).min(1.0), (b + e.flip_1_to_0).min(1.0));
                }
            }
            for (k, name) in names.iter().enumerate() {
                t.readout_applies[k] = r.applies_to.covers(name);
            }
        }
        t
    }
}

/// The single-site state `(1 − q)|ψ⟩⟨ψ| + q X|ψ⟩⟨ψ|X` as a 2 × 2 density matrix.
fn site_matrix(l: SiteState, q: f64) -> [[Complex64; 2]; 2] {
    let a = site_ket(l);
    let b = [a[1], a[0]]; // X|ψ⟩
    let m = |r: usize, c: usize| (1.0 - q) * a[r] * a[c].conj() + q * b[r] * b[c].conj();
    [[m(0, 0), m(0, 1)], [m(1, 0), m(1, 1)]]
}

/// Everything a realization of the open path needs, shared by all realizations.
pub(super) struct OpenSetup<'a> {
    pub s: &'a Scenario,
    pub base: &'a PauliSum,
    pub instances: &'a [TrueInstance],
    pub compiled: &'a [Compiled],
    pub truth: &'a DeviceTruth,
    pub once: &'a [f64],
    pub seed: u64,
}

impl OpenSetup<'_> {
    /// Realization `r`: its draws, the density-matrix evolution and the shots.
    pub(super) fn realization(&self, r: usize) -> RealizationResult {
        let s = self.s;
        let n = s.lattice.n_sites();
        let t_count = s.times.len();
        let mut rng = sample::realization_stream(self.seed, r);
        let g: Vec<f64> = if s.true_noise.redrawn == Redrawn::Once {
            self.once.to_vec()
        } else {
            self.instances
                .iter()
                .map(|i| sample::draw(&mut rng, &i.family))
                .collect()
        };
        let h = noisy_operator(self.base, self.instances, &g, n);
        let start: Vec<_> = s
            .initial_state
            .iter()
            .zip(&self.truth.preparation)
            .map(|(&l, &q)| site_matrix(l, q))
            .collect();
        let mut rho = Density::product(&start);
        let mut st = Stats::default();
        let k_obs = self.compiled.len();
        let mut values = vec![ndarray::Array2::<f64>::zeros((1, t_count)); k_obs];
        let mut exact = vec![vec![0.0; t_count]; k_obs];
        let none = vec![(0.0, 0.0); n];
        let mut now = 0.0;
        for (k, &t) in s.times.iter().enumerate() {
            st.generator_applications += evolve_density(&h, &self.truth.jumps, &mut rho, t - now);
            now = t;
            // Outcome probabilities per measured basis, computed once for all observables
            // that share it (in first-use order, so the arithmetic does not depend on it).
            let mut by_basis: Vec<(&[char], Vec<f64>)> = Vec::new();
            for (o, c) in self.compiled.iter().enumerate() {
                let flips = if self.truth.readout_applies[o] {
                    &self.truth.readout
                } else {
                    &none
                };
                let j = match by_basis.iter().position(|(b, _)| *b == c.basis.as_slice()) {
                    Some(j) => j,
                    None => {
                        by_basis.push((&c.basis, rho.probabilities(&c.basis)));
                        by_basis.len() - 1
                    }
                };
                let p = &by_basis[j].1;
                let e: f64 = c
                    .terms
                    .iter()
                    .map(|(ps, w)| w * recorded_parity(p, ps.support_mask(), flips))
                    .sum();
                exact[o][k] = e;
                values[o][[0, k]] = if c.single {
                    sample::pauli_shot_mean(&mut rng, s.shots, e)
                } else {
                    let measured: u64 = c.terms.iter().fold(0, |m, (ps, _)| m | ps.support_mask());
                    let states = sample::sample_weighted(&mut rng, p, s.shots);
                    let mut sum = 0.0;
                    for b in states {
                        let mut b = b;
                        if self.truth.readout_applies[o] {
                            let mut m = measured;
                            while m != 0 {
                                let i = m.trailing_zeros() as usize;
                                m &= m - 1;
                                let (p01, p10) = flips[i];
                                let q = if (b >> i) & 1 == 0 { p01 } else { p10 };
                                if sample::uniform01(&mut rng) < q {
                                    b ^= 1 << i;
                                }
                            }
                        }
                        sum += c.outcome(b);
                    }
                    sum / s.shots as f64
                };
            }
        }
        st.evolutions += 1;
        RealizationResult {
            values,
            exact,
            draws: if s.true_noise.redrawn == Redrawn::EveryRealization || r == 0 {
                vec![g]
            } else {
                Vec::new()
            },
            patterns: Vec::new(),
            stats: st,
        }
    }
}
