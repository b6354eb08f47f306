//! Pauli strings as bit masks, applied to basis states without building matrices.
//!
//! Convention (docs/simulator.md): one qubit per site, site `i` is bit `i` of the basis index,
//! and `|0⟩` is the `Z = +1` state. A Pauli string is a pair of masks `(x, z)`: site `i` carries
//! `X` if only bit `i` of `x` is set, `Z` if only bit `i` of `z` is set, and `Y` if both are set,
//! with `Y = i·X·Z` per site. Acting on a basis state,
//!
//! `P|b⟩ = i^{n_Y} · (−1)^{popcount(b & z)} · |b ⊕ x⟩`,
//!
//! where `n_Y = popcount(x & z)`. Everything else in the simulator is built on this one rule.

use num_complex::Complex64;

/// A Pauli string on up to 64 sites, as X and Z bit masks (`Y` sets both).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct PauliString {
    /// Sites that flip (X or Y).
    pub x: u64,
    /// Sites that take a sign (Z or Y).
    pub z: u64,
}

/// `i^k` for `k` modulo 4.
pub fn i_power(k: u32) -> Complex64 {
    match k % 4 {
        0 => Complex64::new(1.0, 0.0),
        1 => Complex64::new(0.0, 1.0),
        2 => Complex64::new(-1.0, 0.0),
        _ => Complex64::new(0.0, -1.0),
    }
}

/// `(−1)^{popcount(b & mask)}` as `±1.0`.
#[inline]
pub fn parity_sign(b: u64, mask: u64) -> f64 {
    if (b & mask).count_ones() & 1 == 1 {
        -1.0
    } else {
        1.0
    }
}

impl PauliString {
    /// The identity.
    pub const IDENTITY: PauliString = PauliString { x: 0, z: 0 };

    /// The string with `letters[k]` (one of `X`, `Y`, `Z`) on `sites[k]`. `None` if the
    /// lengths differ, a letter is not X/Y/Z, a site is ≥ 64 or a site repeats.
    pub fn from_letters(letters: &str, sites: &[usize]) -> Option<PauliString> {
        let chars: Vec<char> = letters.chars().collect();
        if chars.len() != sites.len() {
            return None;
        }
        let mut p = PauliString::IDENTITY;
        for (&c, &s) in chars.iter().zip(sites) {
            if s >= 64 || (p.x | p.z) & (1u64 << s) != 0 {
                return None;
            }
            let bit = 1u64 << s;
            match c {
                'X' => p.x |= bit,
                'Y' => {
                    p.x |= bit;
                    p.z |= bit
                }
                'Z' => p.z |= bit,
                _ => return None,
            }
        }
        Some(p)
    }

    /// A single-site operator `letter` (`X`, `Y` or `Z`) on `site`.
    pub fn single(letter: char, site: usize) -> Option<PauliString> {
        Self::from_letters(&letter.to_string(), &[site])
    }

    /// Sites the string acts on non-trivially, as a mask.
    pub fn support_mask(&self) -> u64 {
        self.x | self.z
    }

    /// Number of `Y` factors.
    pub fn n_y(&self) -> u32 {
        (self.x & self.z).count_ones()
    }

    /// Whether the string is diagonal in the computational basis (only I and Z).
    pub fn is_diagonal(&self) -> bool {
        self.x == 0
    }

    /// The letter on `site` (`I`, `X`, `Y` or `Z`).
    pub fn letter(&self, site: usize) -> char {
        let bit = 1u64 << site;
        match (self.x & bit != 0, self.z & bit != 0) {
            (false, false) => 'I',
            (true, false) => 'X',
            (true, true) => 'Y',
            (false, true) => 'Z',
        }
    }

    /// `P|b⟩ = phase · |b ⊕ x⟩`: returns `(b ⊕ x, phase)`.
    pub fn apply_to_basis(&self, b: u64) -> (u64, Complex64) {
        (b ^ self.x, i_power(self.n_y()) * parity_sign(b, self.z))
    }

    /// `⟨ψ|P|ψ⟩` (real for a Hermitian P), summed in index order.
    pub fn expectation(&self, psi: &[Complex64]) -> f64 {
        let phase = i_power(self.n_y());
        let mut acc = Complex64::new(0.0, 0.0);
        for (b, &amp) in psi.iter().enumerate() {
            let b = b as u64;
            let target = (b ^ self.x) as usize;
            acc += psi[target].conj() * amp * parity_sign(b, self.z);
        }
        (acc * phase).re
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    #[test]
    fn single_site_paulis_act_as_the_textbook_matrices() {
        // Textbook Pauli matrices in the basis (|0⟩, |1⟩) with Z|0⟩ = |0⟩.
        let x = PauliString::single('X', 0).unwrap();
        let y = PauliString::single('Y', 0).unwrap();
        let z = PauliString::single('Z', 0).unwrap();
        assert_eq!(x.apply_to_basis(0), (1, c(1.0, 0.0)));
        assert_eq!(y.apply_to_basis(0), (1, c(0.0, 1.0)));
        assert_eq!(y.apply_to_basis(1), (0, c(0.0, -1.0)));
        assert_eq!(z.apply_to_basis(0), (0, c(1.0, 0.0)));
        assert_eq!(z.apply_to_basis(1), (1, c(-1.0, 0.0)));
    }

    #[test]
    fn expectations_of_eigenstates_are_plus_minus_one() {
        let s = std::f64::consts::FRAC_1_SQRT_2;
        let plus_i = [c(s, 0.0), c(0.0, s)]; // (|0⟩ + i|1⟩)/√2, the Y = +1 state
        let y = PauliString::single('Y', 0).unwrap();
        assert!((y.expectation(&plus_i) - 1.0).abs() < 1e-15);
        let minus = [c(s, 0.0), c(-s, 0.0)];
        let x = PauliString::single('X', 0).unwrap();
        assert!((x.expectation(&minus) + 1.0).abs() < 1e-15);
    }

    #[test]
    fn strings_reject_bad_letters_and_repeated_sites() {
        assert!(PauliString::from_letters("XQ", &[0, 1]).is_none());
        assert!(PauliString::from_letters("XX", &[3, 3]).is_none());
        assert!(PauliString::from_letters("XX", &[3]).is_none());
        let p = PauliString::from_letters("XYZ", &[0, 2, 5]).unwrap();
        assert_eq!((p.x, p.z), (0b101, 0b100100));
        assert_eq!(p.letter(2), 'Y');
        assert_eq!(p.letter(1), 'I');
    }
}
