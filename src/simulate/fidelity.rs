//! The ideal trajectory of a scenario, kept in memory, and its comparison with one noisy
//! evolution: the fidelity `F(t) = |⟨ψ(t)|ψ_g(t)⟩|²` (docs/method.md §4) and the exact noisy values
//! of the scenario's observables at every recorded time.
//!
//! [`super::run::simulate`] records only expectation values; checking the fidelity bound needs
//! the states themselves, and checking the one-evolution bounds when noise is redrawn every
//! shot needs the value of each single draw (the truth file keeps only shot means). Both come
//! from here, for one given draw `g`, with the same Hamiltonian conventions as the simulator
//! (`H(g) = H + Σ_i a_i (μ_i + g_i) V_i`, identity parts kept: they only change a global phase,
//! which `F` does not see).
//!
//! Precision: both states come from the same Chebyshev propagator (truncation below 1e-13 per
//! step in the state's norm), so `F` is exact to about 1e-12; overlaps are summed in index
//! order (deterministic).

use num_complex::Complex64;

use super::hamiltonian::{Operator, PauliSum};
use super::pauli::PauliString;
use super::propagate::{evolve, Workspace, DEFAULT_TOLERANCE};
use super::run::{add_noise_term, product_state, target_hamiltonian, TrueInstance};
use crate::inputs::scenario::Scenario;

/// What one noisy evolution gives beside the ideal one.
#[derive(Debug, Clone, PartialEq)]
pub struct NoisyTrace {
    /// `|⟨ψ(t)|ψ_g(t)⟩|²` per recorded time.
    pub fidelity: Vec<f64>,
    /// Exact `⟨O⟩` in the noisy state: per observable (the scenario's order, i.e. by name),
    /// per recorded time.
    pub values: Vec<Vec<f64>>,
}

/// The ideal states of a scenario at its recorded times, with what is needed to evolve noisy
/// copies of the initial state.
#[derive(Debug, Clone)]
pub struct IdealTrajectory {
    n_sites: usize,
    times: Vec<f64>,
    base: PauliSum,
    initial: Vec<Complex64>,
    /// `ψ(t_k)` under the target Hamiltonian.
    states: Vec<Vec<Complex64>>,
    /// Per observable: its weighted Pauli terms.
    observables: Vec<Vec<(PauliString, f64)>>,
}

impl IdealTrajectory {
    /// Evolves the scenario's initial product state under its target Hamiltonian.
    pub fn new(s: &Scenario) -> IdealTrajectory {
        let n_sites = s.lattice.n_sites();
        let base = target_hamiltonian(s);
        let initial = product_state(&s.initial_state);
        let states = trajectory(&Operator::compile(&base, n_sites), &initial, &s.times);
        let observables = s
            .observables
            .iter()
            .map(|o| {
                o.terms
                    .iter()
                    .filter_map(|t| {
                        PauliString::from_letters(&t.letters, &t.sites).map(|p| (p, t.weight))
                    })
                    .collect()
            })
            .collect();
        IdealTrajectory {
            n_sites,
            times: s.times.clone(),
            base,
            initial,
            states,
            observables,
        }
    }

    /// The ideal value of observable `o` (scenario order) at time index `k`.
    pub fn ideal_value(&self, o: usize, k: usize) -> f64 {
        expectation(&self.observables[o], &self.states[k])
    }

    /// Evolves the initial state under `H(g)` for the draw `g` (one value per instance, in
    /// instance order) and compares it with the ideal trajectory at every recorded time.
    pub fn compare(&self, instances: &[TrueInstance], g: &[f64]) -> NoisyTrace {
        let mut h = self.base.clone();
        for (i, gi) in instances.iter().zip(g) {
            add_noise_term(
                &mut h,
                i.operator,
                &i.support,
                i.amplitude * (i.mean_offset + gi),
            );
        }
        let noisy = trajectory(
            &Operator::compile(&h, self.n_sites),
            &self.initial,
            &self.times,
        );
        let fidelity = self
            .states
            .iter()
            .zip(&noisy)
            .map(|(a, b)| overlap(a, b).norm_sqr())
            .collect();
        let values = self
            .observables
            .iter()
            .map(|terms| noisy.iter().map(|psi| expectation(terms, psi)).collect())
            .collect();
        NoisyTrace { fidelity, values }
    }
}

/// `ψ(t_k)` for every recorded time, evolving from one time to the next.
fn trajectory(h: &Operator, psi0: &[Complex64], times: &[f64]) -> Vec<Vec<Complex64>> {
    let mut psi = psi0.to_vec();
    let mut work = Workspace::default();
    let mut now = 0.0;
    let mut out = Vec::with_capacity(times.len());
    for &t in times {
        evolve(h, &mut psi, t - now, DEFAULT_TOLERANCE, &mut work);
        now = t;
        out.push(psi.clone());
    }
    out
}

/// `⟨a|b⟩`, summed in index order.
fn overlap(a: &[Complex64], b: &[Complex64]) -> Complex64 {
    let mut acc = Complex64::new(0.0, 0.0);
    for (x, y) in a.iter().zip(b) {
        acc += x.conj() * y;
    }
    acc
}

fn expectation(terms: &[(PauliString, f64)], psi: &[Complex64]) -> f64 {
    terms.iter().map(|(p, w)| w * p.expectation(psi)).sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::inputs::scenario::{parse_scenario, NoiseOperator};
    use crate::model::Family;

    /// An invented scenario: `sites` sites of an open chain from `state`, with a field
    /// `0.4 Z` on every site, so that the ideal evolution is not trivial.
    fn scenario(sites: usize, j: f64, state: &str, observable: &str) -> Scenario {
        let text = format!(
            r#"{{"format": "quassay-scenario", "format_version": 1, "run_id": "invented-unit",
            "time_unit": "us", "energy_unit": "rad/us",
            "lattice": {{"geometry": "chain", "shape": [{sites}], "boundary": "open"}},
            "hamiltonian": {{"J": {j}, "anisotropy": 0.0, "hz": 0.4}},
            "initial_state": {state},
            "times": [0.0, 0.3, 0.7, 1.5],
            "observables": [{observable}],
            "realizations": 1, "shots": 1, "seed": 1,
            "noise": {{"format": "quassay-noise", "format_version": 1,
              "frequency_unit": "rad/us", "redrawn": "every_realization",
              "sources": [{{"name": "d", "acts_on": "each_site", "operator": "Z",
                "amplitude": 0.1, "distribution": {{"family": "uniform"}},
                "mean_offset": 0.0, "mean_offset_uncertainty": 0.0}}]}}}}"#
        );
        parse_scenario(&text).unwrap()
    }

    fn instance(op: NoiseOperator, support: Vec<usize>, a: f64, mu: f64) -> TrueInstance {
        TrueInstance {
            source: 0,
            support,
            operator: op,
            amplitude: a,
            mean_offset: mu,
            family: Family::Uniform,
            correlation_time: None,
        }
    }

    /// Closed form (the one-site example of docs/method.md §3, "Check", with a field
    /// `h Z` added): the noisy state is `e^{−iφZ}` times the ideal one with `φ = a(μ+g)t`, so
    /// `F = |⟨+|e^{−iφZ}|+⟩|² = cos²φ`, and `⟨X⟩ = cos 2(ht + φ)`.
    #[test]
    fn a_detuned_spin_has_fidelity_cos_squared_of_its_phase() {
        let s = scenario(
            1,
            0.0,
            r#""+""#,
            r#"{"name": "X_0", "pauli": "X", "sites": [0]}"#,
        );
        let ideal = IdealTrajectory::new(&s);
        let (a, mu, g) = (0.8, 0.25, -0.6);
        let trace = ideal.compare(&[instance(NoiseOperator::Z, vec![0], a, mu)], &[g]);
        for (k, &t) in s.times.iter().enumerate() {
            let phi: f64 = a * (mu + g) * t;
            assert!(
                (trace.fidelity[k] - phi.cos().powi(2)).abs() < 1e-12,
                "t={t}: {} vs {}",
                trace.fidelity[k],
                phi.cos().powi(2)
            );
            assert!(
                (trace.values[0][k] - (2.0 * (0.4 * t + phi)).cos()).abs() < 1e-12,
                "t={t}: {}",
                trace.values[0][k]
            );
            assert!((ideal.ideal_value(0, k) - (0.8 * t).cos()).abs() < 1e-12);
        }
    }

    /// Closed form: two sites under `J(XX + YY)` from `|01⟩` stay in span{|01⟩, |10⟩}, where
    /// `H = 2J σ_x`; a detuning `ε Z_0` adds `ε σ_z` (site 0 is `|0⟩`, Z = +1, in the first
    /// state; the fields `0.4 (Z_0 + Z_1)` vanish on this subspace). With `Ω = √(ε² + 4J²)`: `ψ_g(t) = (cos Ωt − i (ε/Ω) sin Ωt, −i (2J/Ω) sin Ωt)`,
    /// `ψ(t) = (cos 2Jt, −i sin 2Jt)`. A `ZZ` term is `−1` on both states of the subspace: a
    /// global phase, so F does not change.
    #[test]
    fn an_exchange_pair_with_a_detuning_follows_the_rabi_formula() {
        let j = 0.7;
        let s = scenario(
            2,
            j,
            r#"["0", "1"]"#,
            r#"{"name": "Z_0", "pauli": "Z", "sites": [0]}"#,
        );
        let ideal = IdealTrajectory::new(&s);
        let (a, g) = (0.9, 0.5);
        let eps = a * g;
        let omega = (eps * eps + 4.0 * j * j).sqrt();
        let inst = [
            instance(NoiseOperator::Z, vec![0], a, 0.0),
            instance(NoiseOperator::ZZ, vec![0, 1], 1.3, 0.0),
        ];
        let trace = ideal.compare(&inst, &[g, 0.4]);
        for (k, &t) in s.times.iter().enumerate() {
            let ideal_amp = [
                Complex64::new((2.0 * j * t).cos(), 0.0),
                Complex64::new(0.0, -(2.0 * j * t).sin()),
            ];
            let noisy_amp = [
                Complex64::new((omega * t).cos(), -(eps / omega) * (omega * t).sin()),
                Complex64::new(0.0, -(2.0 * j / omega) * (omega * t).sin()),
            ];
            let f = (ideal_amp[0].conj() * noisy_amp[0] + ideal_amp[1].conj() * noisy_amp[1])
                .norm_sqr();
            assert!(
                (trace.fidelity[k] - f).abs() < 1e-11,
                "t={t}: {} vs {f}",
                trace.fidelity[k]
            );
            let z0 = noisy_amp[0].norm_sqr() - noisy_amp[1].norm_sqr();
            assert!((trace.values[0][k] - z0).abs() < 1e-11);
        }
        // Without noise the fidelity is 1 and the values are the ideal ones.
        let none = ideal.compare(&inst, &[0.0, 0.4]);
        let quiet = ideal.compare(&[], &[]);
        assert!(quiet.fidelity.iter().all(|f| (f - 1.0).abs() < 1e-12));
        // The ZZ term alone (g = 0 for the detuning) is a global phase on this subspace.
        assert!(none.fidelity.iter().all(|f| (f - 1.0).abs() < 1e-11));
        for k in 0..s.times.len() {
            assert!((quiet.values[0][k] - ideal.ideal_value(0, k)).abs() < 1e-12);
        }
    }
}
