//! Exact open-system evolution for rehearsing device errors: the density matrix under
//! `dρ/dt = −i[H, ρ] + Σ_j D_j(ρ)` with the single-site jumps of docs/method.md §7.1, the
//! preparation mixture and the readout flips of §7.2–7.3.
//!
//! Why a module of its own: the state-vector propagator ([`super::propagate`]) needs a
//! Hermitian generator; the Lindblad generator is not, so the density matrix is propagated by
//! a truncated Taylor series of `e^{Δt 𝓛}` over steps with `Λ Δt ≤ 4`, `Λ = 2‖H‖ + 2Σγ` an upper
//! bound of the generator's norm, the series cut when a term's largest entry falls below
//! `1e-17` (in exact arithmetic the dropped part is then negligible against the state's entries
//! of order 1). Checked against QuTiP's `mesolve` in `tests/device_errors.rs`.
//!
//! Storage: `ρ` column-major, `ρ_ab` at `b·D + a`, so that a column is a contiguous vector and
//! `Hρ` is [`Operator::apply`] column by column; `ρH = (Hρ)†` because every Taylor term is
//! Hermitian (𝓛 maps Hermitian matrices to Hermitian matrices). Site `i` is bit `i` of a basis
//! index; `Z|0⟩ = |0⟩`.

use num_complex::Complex64;

use super::hamiltonian::Operator;
use crate::model::device::Jump;

/// Largest `Λ Δt` of one Taylor step.
const STEP: f64 = 4.0;
/// A Taylor term whose largest entry is below this ends the series.
const CUT: f64 = 1e-17;
/// Most Taylor terms per step (never reached with `Λ Δt ≤ 4`: `4^60/60!` is about 1e-46).
const MAX_TERMS: usize = 60;

/// A density matrix of `n` qubits, column-major.
#[derive(Debug, Clone, PartialEq)]
pub struct Density {
    pub n_sites: usize,
    pub data: Vec<Complex64>,
}

impl Density {
    fn dim(&self) -> usize {
        1 << self.n_sites
    }

    /// `ρ_ab`.
    pub fn at(&self, a: usize, b: usize) -> Complex64 {
        self.data[b * self.dim() + a]
    }

    /// The product `⊗_i ρ_i` of single-site matrices `[[ρ00, ρ01], [ρ10, ρ11]]`.
    pub fn product(sites: &[[[Complex64; 2]; 2]]) -> Density {
        let n = sites.len();
        let d = 1usize << n;
        let mut data = vec![Complex64::new(0.0, 0.0); d * d];
        for b in 0..d {
            for a in 0..d {
                let mut v = Complex64::new(1.0, 0.0);
                for (i, m) in sites.iter().enumerate() {
                    v *= m[(a >> i) & 1][(b >> i) & 1];
                }
                data[b * d + a] = v;
            }
        }
        Density { n_sites: n, data }
    }

    /// `Tr(ρ)`, real part (the imaginary part is rounding).
    pub fn trace(&self) -> f64 {
        (0..self.dim()).map(|a| self.at(a, a).re).sum()
    }

    /// The diagonal of `U ρ U†`, `U` rotating site `i` by `H` for `X`, `S†` then `H` for `Y`
    /// (as [`super::run`] rotates a state vector): the outcome probabilities of measuring every
    /// site in the basis of `letters[i]` (`I` and `Z`: unchanged).
    pub fn probabilities(&self, letters: &[char]) -> Vec<f64> {
        let d = self.dim();
        let mut m = self.data.clone();
        let h = std::f64::consts::FRAC_1_SQRT_2;
        for (site, &c) in letters.iter().enumerate() {
            if c != 'X' && c != 'Y' {
                continue;
            }
            let bit = 1usize << site;
            // u = [[h, h], [h, −h]] · diag(1, s) with s = −i for Y, 1 for X.
            let s = if c == 'Y' {
                Complex64::new(0.0, -1.0)
            } else {
                Complex64::new(1.0, 0.0)
            };
            // Rows: m ← u m (each column).
            for b in 0..d {
                for a in 0..d {
                    if a & bit != 0 {
                        continue;
                    }
                    let (x0, x1) = (m[b * d + a], m[b * d + (a | bit)] * s);
                    m[b * d + a] = (x0 + x1) * h;
                    m[b * d + (a | bit)] = (x0 - x1) * h;
                }
            }
            // Columns: m ← m u†.
            let sc = s.conj();
            for b in 0..d {
                if b & bit != 0 {
                    continue;
                }
                for a in 0..d {
                    let (y0, y1) = (m[b * d + a], m[(b | bit) * d + a] * sc);
                    m[b * d + a] = (y0 + y1) * h;
                    m[(b | bit) * d + a] = (y0 - y1) * h;
                }
            }
        }
        (0..d).map(|a| m[a * d + a].re.max(0.0)).collect()
    }
}

/// The single-site jumps acting on the state, with their rates (rad per time unit, i.e. 1/time).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Jumps {
    /// `(site, jump, γ)`, applied in this order.
    pub list: Vec<(usize, Jump, f64)>,
}

impl Jumps {
    fn total_rate(&self) -> f64 {
        self.list.iter().map(|(_, _, g)| g).sum()
    }
}

/// `out = 𝓛(ρ)`.
fn generator(
    h: &Operator,
    jumps: &Jumps,
    rho: &[Complex64],
    out: &mut [Complex64],
    d: usize,
    hr: &mut [Complex64],
) {
    for b in 0..d {
        h.apply(&rho[b * d..(b + 1) * d], &mut hr[b * d..(b + 1) * d]);
    }
    let minus_i = Complex64::new(0.0, -1.0);
    for b in 0..d {
        for a in 0..d {
            out[b * d + a] = minus_i * (hr[b * d + a] - hr[a * d + b].conj());
        }
    }
    for &(site, jump, g) in &jumps.list {
        let bit = 1usize << site;
        for b in 0..d {
            for a in 0..d {
                let (na, nb) = ((a & bit != 0) as u8, (b & bit != 0) as u8);
                let here = rho[b * d + a];
                let add = match jump {
                    // γ(ZρZ − ρ): −2γρ_ab where the bits differ.
                    Jump::Dephasing => {
                        if na != nb {
                            -2.0 * g * here
                        } else {
                            Complex64::new(0.0, 0.0)
                        }
                    }
                    // γ(σ⁻ρσ⁺ − ½{n, ρ}), σ⁻ = |0⟩⟨1|.
                    Jump::Decay => {
                        let gain = if na == 0 && nb == 0 {
                            rho[(b | bit) * d + (a | bit)]
                        } else {
                            Complex64::new(0.0, 0.0)
                        };
                        g * (gain - 0.5 * f64::from(na + nb) * here)
                    }
                    // γ(σ⁺ρσ⁻ − ½{1 − n, ρ}), σ⁺ = |1⟩⟨0|.
                    Jump::Excitation => {
                        let gain = if na == 1 && nb == 1 {
                            rho[(b & !bit) * d + (a & !bit)]
                        } else {
                            Complex64::new(0.0, 0.0)
                        };
                        g * (gain - 0.5 * f64::from(2 - na - nb) * here)
                    }
                    // γ(Tr_i ρ ⊗ 1/2 − ρ).
                    Jump::Depolarising => {
                        let mixed = if na == nb {
                            0.5 * (rho[(b & !bit) * d + (a & !bit)]
                                + rho[(b | bit) * d + (a | bit)])
                        } else {
                            Complex64::new(0.0, 0.0)
                        };
                        g * (mixed - here)
                    }
                };
                out[b * d + a] += add;
            }
        }
    }
}

/// Evolves `rho` by `dt` under `H` and `jumps`; returns the number of generator applications.
pub fn evolve_density(h: &Operator, jumps: &Jumps, rho: &mut Density, dt: f64) -> usize {
    if dt <= 0.0 {
        return 0;
    }
    let d = rho.dim();
    let (lo, hi) = h.spectral_bounds();
    let lambda = 2.0 * lo.abs().max(hi.abs()) + 2.0 * jumps.total_rate();
    let steps = ((lambda * dt / STEP).ceil() as usize).max(1);
    let tau = dt / steps as f64;
    let zero = Complex64::new(0.0, 0.0);
    let mut term = vec![zero; d * d];
    let mut next = vec![zero; d * d];
    let mut hr = vec![zero; d * d];
    let mut applications = 0;
    for _ in 0..steps {
        term.copy_from_slice(&rho.data);
        for m in 1..=MAX_TERMS {
            generator(h, jumps, &term, &mut next, d, &mut hr);
            applications += 1;
            let f = tau / m as f64;
            let mut largest = 0.0f64;
            for (t, x) in term.iter_mut().zip(&next) {
                *t = x * f;
                largest = largest.max(t.norm());
            }
            for (r, t) in rho.data.iter_mut().zip(&term) {
                *r += t;
            }
            if largest < CUT {
                break;
            }
        }
    }
    applications
}

/// The expectation of the *recorded* value of a Pauli product on the sites of `mask`, measured
/// with outcome probabilities `p` (index = rotated basis state), when site `i`'s recorded bit
/// is flipped with probability `flip[i] = (p(0→1), p(1→0))`, independently given the true bits:
/// `Σ_b p_b Π_{i∈mask} f_i(b_i)` with `f_i(0) = 1 − 2p(0→1)`, `f_i(1) = −(1 − 2p(1→0))`.
pub fn recorded_parity(p: &[f64], mask: u64, flip: &[(f64, f64)]) -> f64 {
    let mut total = 0.0;
    for (b, &pb) in p.iter().enumerate() {
        if pb == 0.0 {
            continue;
        }
        let mut f = 1.0;
        let mut m = mask;
        while m != 0 {
            let i = m.trailing_zeros() as usize;
            m &= m - 1;
            let (p01, p10) = flip.get(i).copied().unwrap_or((0.0, 0.0));
            f *= if (b >> i) & 1 == 0 {
                1.0 - 2.0 * p01
            } else {
                -(1.0 - 2.0 * p10)
            };
        }
        total += pb * f;
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::simulate::hamiltonian::PauliSum;
    use crate::simulate::pauli::PauliString;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    fn expect(rho: &Density, p: &PauliString) -> f64 {
        // Tr(ρ P) = Σ_b ⟨b|ρ P|b⟩ = Σ_b Σ_a ρ_ba P_ab, P|b⟩ = phase |b'⟩.
        let d = 1usize << rho.n_sites;
        let mut s = c(0.0, 0.0);
        for b in 0..d {
            let (b2, phase) = p.apply_to_basis(b as u64);
            s += rho.at(b, b2 as usize) * phase;
        }
        s.re
    }

    /// A lone qubit with closed forms (textbook solutions of the Bloch equations): under
    /// dephasing at γ, ⟨X⟩ of |+⟩ decays as e^{−2γt}; under decay at γ, ⟨Z⟩ of |1⟩ is
    /// 1 − 2e^{−γt}; under depolarising at γ, ⟨X⟩ of |+⟩ is e^{−γt}; with a field hz Z, ⟨X⟩ of
    /// |+⟩ is cos(2 hz t) e^{−2γt} under dephasing.
    #[test]
    fn a_lone_qubit_follows_the_bloch_equations() {
        let plus = [[c(0.5, 0.0), c(0.5, 0.0)], [c(0.5, 0.0), c(0.5, 0.0)]];
        let one = [[c(0.0, 0.0), c(0.0, 0.0)], [c(0.0, 0.0), c(1.0, 0.0)]];
        let x = PauliString::single('X', 0).unwrap();
        let z = PauliString::single('Z', 0).unwrap();
        let zero_h = Operator::compile(&PauliSum::new(), 1);
        let mut field = PauliSum::new();
        field.add(z, 0.7);
        let field_h = Operator::compile(&field, 1);
        let g = 0.3;
        for t in [0.1, 1.0, 3.0] {
            let run = |h: &Operator, jump: Jump, start| {
                let mut rho = Density::product(&[start]);
                evolve_density(
                    h,
                    &Jumps {
                        list: vec![(0, jump, g)],
                    },
                    &mut rho,
                    t,
                );
                rho
            };
            let e = |v: f64, w: f64| assert!((v - w).abs() < 1e-12, "t = {t}: {v} vs {w}");
            e(
                expect(&run(&zero_h, Jump::Dephasing, plus), &x),
                (-2.0 * g * t).exp(),
            );
            e(
                expect(&run(&zero_h, Jump::Decay, one), &z),
                1.0 - 2.0 * (-g * t).exp(),
            );
            e(expect(&run(&zero_h, Jump::Excitation, one), &z), -1.0);
            e(
                expect(&run(&zero_h, Jump::Depolarising, plus), &x),
                (-g * t).exp(),
            );
            e(
                expect(&run(&field_h, Jump::Dephasing, plus), &x),
                (2.0 * 0.7 * t).cos() * (-2.0 * g * t).exp(),
            );
            assert!((run(&field_h, Jump::Depolarising, plus).trace() - 1.0).abs() < 1e-13);
        }
    }

    /// The rotated probabilities of |+⟩ ⊗ |+i⟩: measuring X on site 0 gives 0 always, Y on
    /// site 1 gives 0 always.
    #[test]
    fn probabilities_rotate_into_the_measured_basis() {
        let plus = [[c(0.5, 0.0), c(0.5, 0.0)], [c(0.5, 0.0), c(0.5, 0.0)]];
        let plus_i = [[c(0.5, 0.0), c(0.0, -0.5)], [c(0.0, 0.5), c(0.5, 0.0)]];
        let rho = Density::product(&[plus, plus_i]);
        let p = rho.probabilities(&['X', 'Y']);
        assert!((p[0] - 1.0).abs() < 1e-15, "{p:?}");
        let pz = rho.probabilities(&['Z', 'Z']);
        assert!(pz.iter().all(|x| (x - 0.25).abs() < 1e-15), "{pz:?}");
    }

    /// Readout flips against the enumeration of flip patterns: one site in state 0 with
    /// p(0→1) = 0.1 records ⟨Z⟩ = 0.8; two sites in |01⟩ (site 1 is 1) with flips (0.1, 0.2)
    /// and (0.05, 0.3) record ⟨Z_0 Z_1⟩ = (1 − 2·0.1)·(−(1 − 2·0.3)) = −0.32.
    #[test]
    fn recorded_parities_include_the_flips() {
        assert!((recorded_parity(&[1.0, 0.0], 1, &[(0.1, 0.2)]) - 0.8).abs() < 1e-15);
        let p = [0.0, 0.0, 1.0, 0.0]; // b = 2: site 0 is 0, site 1 is 1
        let v = recorded_parity(&p, 3, &[(0.1, 0.2), (0.05, 0.3)]);
        assert!((v - (-0.32)).abs() < 1e-15, "{v}");
    }
}
