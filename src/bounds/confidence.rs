//! Splitting the user's confidence `1 − ε` into the noise part `p` and the shot part `α`
//! (docs/method.md §3, "The claim and the confidence split"), and the Bonferroni correction over the recorded points.
//!
//! Default `p = α = ε/2`; all of ε goes to the part that remains when the other is absent
//! (no shot term, or no fluctuation term, as when the noise is redrawn every shot). By default
//! the statement is simultaneous over all `T·K` (time, observable) points: each point gets
//! `p/(T·K)` and `α/(T·K)` (Bonferroni). The one-evolution statement `E_1` has no shot part,
//! so by the same rule it gets the whole ε (per point after Bonferroni).

use crate::model::noise::Redrawn;

/// Whether the statement holds for all points at once or for each point separately.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Simultaneity {
    /// All recorded times and observables at once (Bonferroni); the default.
    Simultaneous,
    /// Each (time, observable) point separately.
    Pointwise,
}

impl Simultaneity {
    /// The spelling used in certificates.
    pub fn as_str(self) -> &'static str {
        match self {
            Simultaneity::Simultaneous => "simultaneous",
            Simultaneity::Pointwise => "pointwise",
        }
    }
}

/// What was done with the confidence level, for the certificate.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ConfidenceSplit {
    /// The user's confidence level `1 − ε`.
    pub confidence: f64,
    /// `ε = 1 − confidence`.
    pub epsilon: f64,
    /// Failure probability given to the noise fluctuation (all points together).
    pub p: f64,
    /// Failure probability given to the shot noise (all points together).
    pub alpha: f64,
    /// Number of (time, observable) points `T·K`.
    pub points: usize,
    pub simultaneity: Simultaneity,
    /// `p` per point (after Bonferroni when simultaneous).
    pub p_point: f64,
    /// `α` per point.
    pub alpha_point: f64,
    /// Failure probability of the one-evolution statement `E_1` per point (all of ε).
    pub p_single_point: f64,
    /// Which rule gave `p` and `α`: `"equal_halves"`, `"all_to_noise"`, `"all_to_shots"` or
    /// `"deterministic"` (neither term present).
    pub rule: &'static str,
}

/// Why a confidence level cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ConfidenceError {
    #[error("the confidence level {0} is not strictly between 0 and 1; give e.g. 0.95")]
    OutOfRange(f64),
}

/// Whether the averaged statement has a fluctuation term for this redraw mode.
pub fn has_fluctuation_term(redrawn: Redrawn) -> bool {
    !matches!(redrawn, Redrawn::EveryShot)
}

/// Splits `confidence = 1 − ε` between the fluctuation term and the shot term.
///
/// `points` is `T·K`; with [`Simultaneity::Simultaneous`] each point gets `1/points` of each
/// part (Bonferroni). A `points` of 0 is treated as 1.
pub fn split(
    confidence: f64,
    has_fluctuation: bool,
    has_shot: bool,
    points: usize,
    simultaneity: Simultaneity,
) -> Result<ConfidenceSplit, ConfidenceError> {
    if confidence.is_nan() || confidence <= 0.0 || confidence >= 1.0 {
        return Err(ConfidenceError::OutOfRange(confidence));
    }
    // ε is formed once; 1 − confidence is exact for confidence in [0.5, 1) (Sterbenz).
    let epsilon = 1.0 - confidence;
    let (p, alpha, rule) = match (has_fluctuation, has_shot) {
        (true, true) => (0.5 * epsilon, 0.5 * epsilon, "equal_halves"),
        (true, false) => (epsilon, 0.0, "all_to_noise"),
        (false, true) => (0.0, epsilon, "all_to_shots"),
        (false, false) => (0.0, 0.0, "deterministic"),
    };
    let points = points.max(1);
    let divisor = match simultaneity {
        Simultaneity::Simultaneous => points as f64,
        Simultaneity::Pointwise => 1.0,
    };
    Ok(ConfidenceSplit {
        confidence,
        epsilon,
        p,
        alpha,
        points,
        simultaneity,
        p_point: p / divisor,
        alpha_point: alpha / divisor,
        p_single_point: epsilon / divisor,
        rule,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_split_is_equal_halves_with_bonferroni() {
        let s = split(0.95, true, true, 40, Simultaneity::Simultaneous).unwrap();
        assert!((s.p - 0.025).abs() < 1e-16 && (s.alpha - 0.025).abs() < 1e-16);
        assert!((s.p_point - 0.025 / 40.0).abs() < 1e-18);
        assert!((s.alpha_point - 0.025 / 40.0).abs() < 1e-18);
        assert!((s.p_single_point - 0.05 / 40.0).abs() < 1e-17);
        assert_eq!(s.rule, "equal_halves");
    }

    #[test]
    fn a_missing_term_gives_all_of_epsilon_to_the_other() {
        let every_shot = has_fluctuation_term(Redrawn::EveryShot);
        assert!(!every_shot);
        let s = split(0.99, every_shot, true, 1, Simultaneity::Pointwise).unwrap();
        assert_eq!((s.p, s.rule), (0.0, "all_to_shots"));
        assert!((s.alpha - 0.01).abs() < 1e-16);
        let s = split(0.99, true, false, 1, Simultaneity::Pointwise).unwrap();
        assert!((s.p - 0.01).abs() < 1e-16 && s.alpha == 0.0);
    }

    #[test]
    fn pointwise_does_not_divide_and_bad_levels_are_refused() {
        let s = split(0.9, true, true, 1000, Simultaneity::Pointwise).unwrap();
        assert!((s.p_point - 0.05).abs() < 1e-15);
        for bad in [0.0, 1.0, -0.5, 1.5, f64::NAN] {
            assert!(split(bad, true, true, 1, Simultaneity::Simultaneous).is_err());
        }
    }

    #[test]
    fn a_stricter_confidence_never_gives_larger_failure_probabilities() {
        let mut last = f64::INFINITY;
        for c in [0.5, 0.9, 0.95, 0.99, 0.999_999] {
            let s = split(c, true, true, 7, Simultaneity::Simultaneous).unwrap();
            assert!(s.p_point < last);
            last = s.p_point;
        }
    }
}
