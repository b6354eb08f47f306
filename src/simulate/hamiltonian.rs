//! Hamiltonians and noise terms as sums of Pauli strings, compiled for fast application.
//!
//! A [`PauliSum`] is a Hermitian operator `Σ_t c_t P_t` with real coefficients. Compiling it
//! gives an [`Operator`]: the diagonal part (identity and Z strings) precomputed as one vector,
//! and the off-diagonal strings grouped by their X mask, so that `H|ψ⟩` is a gather
//!
//! `(Hψ)[b] = d[b]·ψ[b] + Σ_x Σ_{t∈x} c_t i^{n_Y,t} (−1)^{popcount((b⊕x) & z_t)} ψ[b⊕x]`.
//!
//! The operator also carries rigorous bounds on its spectrum, needed by the Chebyshev
//! propagator: by Weyl's inequality every eigenvalue of `D + O` lies in
//! `[min d − ‖O‖, max d + ‖O‖]`, and `‖O‖ ≤ Σ_x ‖O_x‖` where each `O_x` is a permutation times
//! a diagonal, so `‖O_x‖ = max_b |amplitude_x(b)|` exactly (computed over all `b`).

use std::collections::BTreeMap;

use num_complex::Complex64;

use super::pauli::{i_power, parity_sign, PauliString};

/// A Hermitian operator `Σ_t c_t P_t` with real coefficients, in insertion order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PauliSum {
    /// The terms `(P_t, c_t)`.
    pub terms: Vec<(PauliString, f64)>,
}

impl PauliSum {
    /// The zero operator.
    pub fn new() -> PauliSum {
        PauliSum::default()
    }

    /// Adds `coefficient · P`.
    pub fn add(&mut self, p: PauliString, coefficient: f64) {
        self.terms.push((p, coefficient));
    }

    /// Adds every term of `other`.
    pub fn extend(&mut self, other: &PauliSum) {
        self.terms.extend_from_slice(&other.terms);
    }

    /// `Σ_t |c_t|` over the non-identity terms: a simple bound on the centred norm.
    pub fn coefficient_norm(&self) -> f64 {
        self.terms
            .iter()
            .filter(|(p, _)| *p != PauliString::IDENTITY)
            .map(|(_, c)| c.abs())
            .sum()
    }

    /// The XXZ model with fields (docs/simulator.md):
    /// `H = Σ_e J_e (X_a X_b + Y_a Y_b + Δ Z_a Z_b) + Σ_i (hx_i X_i + hz_i Z_i)`.
    /// `bonds[e] = [a, b]`, `j[e] = J_e`; all values already in rad per time unit.
    pub fn xxz(bonds: &[[u32; 2]], j: &[f64], anisotropy: f64, hx: &[f64], hz: &[f64]) -> PauliSum {
        let mut h = PauliSum::new();
        for (&[a, b], &je) in bonds.iter().zip(j) {
            let (a, b) = (a as usize, b as usize);
            let pair = |l: &str| PauliString::from_letters(l, &[a, b]);
            for (letters, c) in [("XX", je), ("YY", je), ("ZZ", je * anisotropy)] {
                if let Some(p) = pair(letters) {
                    if c != 0.0 {
                        h.add(p, c);
                    }
                }
            }
        }
        for (i, (&x, &z)) in hx.iter().zip(hz).enumerate() {
            if let (Some(px), Some(pz)) = (PauliString::single('X', i), PauliString::single('Z', i))
            {
                if x != 0.0 {
                    h.add(px, x);
                }
                if z != 0.0 {
                    h.add(pz, z);
                }
            }
        }
        h
    }
}

/// How the amplitude of one group depends on the basis state.
#[derive(Debug, Clone)]
enum Amplitude {
    /// The same for every state (one string without Z part, e.g. a transverse field).
    Constant(Complex64),
    /// Real for every state (an even number of Y in every string, e.g. XX + YY): `(z, c)`.
    Real(Vec<(u64, f64)>),
    /// General: `(z, c · i^{n_Y})`.
    General(Vec<(u64, Complex64)>),
}

/// One group of off-diagonal terms that share an X mask.
#[derive(Debug, Clone)]
struct Group {
    x: u64,
    amplitude: Amplitude,
}

impl Group {
    fn new(x: u64, terms: Vec<(u64, Complex64)>) -> Group {
        let amplitude = if terms.len() == 1 && terms[0].0 == 0 {
            Amplitude::Constant(terms[0].1)
        } else if terms.iter().all(|(_, c)| c.im == 0.0) {
            Amplitude::Real(terms.iter().map(|&(z, c)| (z, c.re)).collect())
        } else {
            Amplitude::General(terms)
        };
        Group { x, amplitude }
    }

    /// The amplitude of `|c⟩ → |c ⊕ x⟩`.
    #[inline]
    fn amplitude(&self, c: u64) -> Complex64 {
        match &self.amplitude {
            Amplitude::Constant(a) => *a,
            Amplitude::Real(terms) => Complex64::new(real_amplitude(terms, c), 0.0),
            Amplitude::General(terms) => {
                let mut a = Complex64::new(0.0, 0.0);
                for &(z, coef) in terms {
                    a += coef * parity_sign(c, z);
                }
                a
            }
        }
    }
}

#[inline]
fn real_amplitude(terms: &[(u64, f64)], c: u64) -> f64 {
    let mut a = 0.0;
    for &(z, coef) in terms {
        a += coef * parity_sign(c, z);
    }
    a
}

/// A compiled operator on `n` qubits, ready to be applied matrix-free.
#[derive(Debug, Clone)]
pub struct Operator {
    n_sites: usize,
    diagonal: Vec<f64>,
    groups: Vec<Group>,
    lower: f64,
    upper: f64,
}

impl Operator {
    /// Compiles `sum` on `n_sites` qubits (`n_sites ≤ 30`; terms on higher sites are a bug of
    /// the caller and are ignored). Equal strings are merged, summing coefficients in insertion
    /// order.
    pub fn compile(sum: &PauliSum, n_sites: usize) -> Operator {
        let dim = 1usize << n_sites;
        let limit = if n_sites >= 64 {
            u64::MAX
        } else {
            (1u64 << n_sites) - 1
        };
        let mut merged: BTreeMap<(u64, u64), f64> = BTreeMap::new();
        for &(p, c) in &sum.terms {
            if p.support_mask() & !limit != 0 {
                continue;
            }
            *merged.entry((p.x, p.z)).or_insert(0.0) += c;
        }
        let mut diagonal = vec![0.0f64; dim];
        let mut by_x: BTreeMap<u64, Vec<(u64, Complex64)>> = BTreeMap::new();
        for (&(x, z), &c) in &merged {
            if c == 0.0 {
                continue;
            }
            if x == 0 {
                for (b, d) in diagonal.iter_mut().enumerate() {
                    *d += c * parity_sign(b as u64, z);
                }
            } else {
                let ny = (x & z).count_ones();
                by_x.entry(x).or_default().push((z, i_power(ny) * c));
            }
        }
        let groups: Vec<Group> = by_x
            .into_iter()
            .map(|(x, terms)| Group::new(x, terms))
            .collect();
        let (dmin, dmax) = diagonal
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &d| {
                (lo.min(d), hi.max(d))
            });
        let mut off = 0.0;
        for g in &groups {
            let m = match &g.amplitude {
                Amplitude::Constant(a) => a.norm(),
                _ => (0..dim as u64).fold(0.0f64, |m, c| m.max(g.amplitude(c).norm())),
            };
            off += m;
        }
        // A relative slack of 1e-12 covers the rounding of the sums above.
        let slack = 1e-12 * (dmax.abs().max(dmin.abs()) + off) + f64::MIN_POSITIVE;
        Operator {
            n_sites,
            diagonal,
            groups,
            lower: dmin - off - slack,
            upper: dmax + off + slack,
        }
    }

    /// Number of qubits.
    pub fn n_sites(&self) -> usize {
        self.n_sites
    }

    /// Dimension `2^n`.
    pub fn dim(&self) -> usize {
        self.diagonal.len()
    }

    /// Rigorous `[lower, upper]` containing every eigenvalue.
    pub fn spectral_bounds(&self) -> (f64, f64) {
        (self.lower, self.upper)
    }

    /// `out[b] = α·(Hψ)[b] + β·ψ[b] + γ·out[b]` for every `b` (a fused update used by the
    /// Chebyshev recurrence; `γ = 0` ignores the old content of `out`).
    pub fn apply_fused(
        &self,
        psi: &[Complex64],
        out: &mut [Complex64],
        alpha: f64,
        beta: f64,
        gamma: f64,
    ) {
        // Diagonal part first, then one streaming pass per group (group-outer order keeps the
        // inner loops free of dispatch). The order of additions is fixed, so results are
        // deterministic.
        for (b, o) in out.iter_mut().enumerate() {
            let keep = if gamma == 0.0 {
                Complex64::new(0.0, 0.0)
            } else {
                *o * gamma
            };
            *o = psi[b] * (alpha * self.diagonal[b] + beta) + keep;
        }
        for g in &self.groups {
            let x = g.x as usize;
            match &g.amplitude {
                Amplitude::Constant(a) => {
                    let a = *a * alpha;
                    for (b, o) in out.iter_mut().enumerate() {
                        *o += a * psi[b ^ x];
                    }
                }
                Amplitude::Real(terms) => {
                    for (b, o) in out.iter_mut().enumerate() {
                        let c = b ^ x;
                        *o += psi[c] * (alpha * real_amplitude(terms, c as u64));
                    }
                }
                Amplitude::General(_) => {
                    for (b, o) in out.iter_mut().enumerate() {
                        let c = b ^ x;
                        *o += g.amplitude(c as u64) * psi[c] * alpha;
                    }
                }
            }
        }
    }

    /// `out = Hψ`.
    pub fn apply(&self, psi: &[Complex64], out: &mut [Complex64]) {
        self.apply_fused(psi, out, 1.0, 0.0, 0.0);
    }

    /// `⟨ψ|H|ψ⟩`.
    pub fn expectation(&self, psi: &[Complex64]) -> f64 {
        let mut h = vec![Complex64::new(0.0, 0.0); psi.len()];
        self.apply(psi, &mut h);
        psi.iter().zip(&h).map(|(a, b)| (a.conj() * b).re).sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    #[test]
    fn the_exchange_term_swaps_antiparallel_spins_with_amplitude_two() {
        // (XX + YY)|01⟩ = 2|10⟩ and it annihilates |00⟩, |11⟩ (closed form).
        let h = Operator::compile(
            &PauliSum::xxz(&[[0, 1]], &[1.0], 0.0, &[0.0; 2], &[0.0; 2]),
            2,
        );
        let mut out = vec![c(0.0, 0.0); 4];
        let mut psi = vec![c(0.0, 0.0); 4];
        psi[0b01] = c(1.0, 0.0);
        h.apply(&psi, &mut out);
        assert_eq!(
            out,
            vec![c(0.0, 0.0), c(0.0, 0.0), c(2.0, 0.0), c(0.0, 0.0)]
        );
        psi = vec![c(1.0, 0.0), c(0.0, 0.0), c(0.0, 0.0), c(0.0, 0.0)];
        h.apply(&psi, &mut out);
        assert!(out.iter().all(|a| a.norm() == 0.0));
    }

    #[test]
    fn spectral_bounds_contain_the_known_bond_spectrum() {
        // One XXZ bond, J = 1, Δ = 0.5: eigenvalues Δ, Δ, 2 − Δ, −2 − Δ = 0.5, 0.5, 1.5, −2.5.
        let h = Operator::compile(
            &PauliSum::xxz(&[[0, 1]], &[1.0], 0.5, &[0.0; 2], &[0.0; 2]),
            2,
        );
        let (lo, hi) = h.spectral_bounds();
        assert!(lo <= -2.5 && hi >= 1.5, "{lo} {hi}");
        // Weyl: diagonal ±0.5, off-diagonal norm 2, so [-2.5, 2.5] up to the slack.
        assert!((lo + 2.5).abs() < 1e-9 && (hi - 2.5).abs() < 1e-9);
    }

    #[test]
    fn y_field_is_applied_with_its_imaginary_phase() {
        let mut s = PauliSum::new();
        s.add(PauliString::single('Y', 0).unwrap(), 1.0);
        let h = Operator::compile(&s, 1);
        let mut out = vec![c(0.0, 0.0); 2];
        h.apply(&[c(1.0, 0.0), c(0.0, 0.0)], &mut out);
        assert_eq!(out, vec![c(0.0, 0.0), c(0.0, 1.0)]);
    }
}
