//! The certificate's words: the claim per observable, the assumptions and what is not covered.
//!
//! These sentences are part of the body (so they are covered by the digest) and must never say
//! more than the mathematics gives (docs/method.md §1 and §3, "The claim and the confidence split").

use crate::bounds::confidence::Simultaneity;

/// The claim for one observable, one plain sentence; when the data contradict the noise record
/// (`inconsistent` is true) the sentence says so first, since the claim rests on that record.
pub fn claim_sentence(
    observable: &str,
    confidence: f64,
    simultaneity: Simultaneity,
    inconsistent: bool,
) -> String {
    let claim = claim_only(observable, confidence, simultaneity);
    if inconsistent {
        format!(
            "The data contradict the noise record (see the verdict), so the following claim is \
             not supported by this dataset: {claim}"
        )
    } else {
        claim
    }
}

fn claim_only(observable: &str, confidence: f64, simultaneity: Simultaneity) -> String {
    match simultaneity {
        Simultaneity::Simultaneous => format!(
            "If the noise record describes every perturbation of the hardware (see the assumptions), \
             then with probability at least {confidence}, at every recorded time and jointly with \
             every other observable of this certificate, the ideal-model value of {observable} \
             lies within the reported interval."
        ),
        Simultaneity::Pointwise => format!(
            "If the noise record describes every perturbation of the hardware (see the assumptions), \
             then at each recorded time separately, with probability at least {confidence}, the \
             ideal-model value of {observable} lies within the interval reported for that time; \
             the statement is not simultaneous over times or observables."
        ),
    }
}

/// What the bounds assume (docs/method.md §1).
pub fn assumptions() -> Vec<&'static str> {
    vec![
        "The hardware evolves under the target Hamiltonian plus the noise record's sources: H(g) = H + sum_i delta_i (mu_i + g_i) V_i, constant during one evolution.",
        "The random parts g_i of different sources are independent, have zero mean and follow the declared families; known offsets mu_i are within their stated uncertainties.",
        "The noise is drawn again as the record's `redrawn` says (every shot, every realization, or once for the whole dataset).",
        "The operator spectra, amplitudes and units of the noise record and the run file are correct.",
        "Each reported value is the mean of the stated number of independent projective shots whose outcomes lie in [spectrum_min, spectrum_max] (or, where standard errors are given instead, its error is approximately normal with that standard error).",
        "The fidelity bound assumes a pure initial state.",
    ]
}

/// The data statement's own assumption (docs/method.md §6), added when it is part of the claim.
pub const DATA_ASSUMPTION: &str = "For the data statement: the realizations of each observable are independent evolutions with a common mean (identically prepared and, when the noise is redrawn, with independent draws), the shot averages are unbiased, and the realizations are in the order they were recorded (not reordered after their values were seen).";

/// The assumption added when some observable declares two outcomes (format 1.2).
pub const TWO_OUTCOME_ASSUMPTION: &str = "For observables with two_outcomes: every shot's outcome is spectrum_min or spectrum_max (one projective measurement with two outcomes, as the run file declares), and the shots behind one recorded value are independent repetitions given the noise draw; where the shots of all realizations are pooled into one binomial count (noise drawn once or redrawn every shot, or one realization), they share one success probability.";

/// The sentence added to an observable's claim when the model and data statements are
/// disjoint at some times: no interval is certified there.
pub fn disjoint_sentence(time_indices: &[usize]) -> String {
    format!(
        " At time indices {time_indices:?} the model statement and the data statement do not \
         overlap, which happens with probability at most epsilon if the noise record is right; \
         no interval is certified there."
    )
}

/// The gap about time dependence in [`not_covered`] (and the device list's).
pub const TIME_DEPENDENCE_GAP: &str =
    "Noise that is correlated between sources, or that varies during one evolution.";

/// The same gap when the record declares correlation times (format 1.4).
pub const WINDOWED_TIME_DEPENDENCE_GAP: &str = "Noise that is correlated between sources or between windows, and time dependence within one evolution other than the declared windows (continuous drifts, window edges not at multiples of the correlation time from the start of the evolution, and any variation of a source without a correlation_time).";

/// The first assumption when the record declares correlation times (format 1.4).
pub const WINDOWED_HAMILTONIAN: &str = "The hardware evolves under the target Hamiltonian plus the noise record's sources: H(g, s) = H + sum_i delta_i (mu_i + g_i(s)) V_i, where g_i(s) is constant during one evolution for a source without a correlation_time and piecewise constant on the windows [k tau_i, (k+1) tau_i) for a source with one.";

/// The windows' own assumption (format 1.4).
pub const WINDOWS_ASSUMPTION: &str = "For sources with a correlation_time tau: the windows start at the start of each evolution, the draws of different windows are independent and follow the source's family, and the known offset mu_i is the same in every window.";

/// What the model does not cover, stated in every certificate (docs/method.md §1).
pub fn not_covered() -> Vec<&'static str> {
    vec![
        "Decoherence and other incoherent (Markovian) errors.",
        "State-preparation and measurement errors.",
        "Leakage out of the modelled Hilbert space.",
        TIME_DEPENDENCE_GAP,
        "Errors in the target Hamiltonian itself: the interval is for the ideal model's value, not for nature's.",
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_claim_names_the_observable_the_probability_and_the_scope() {
        let s = claim_sentence("Z_5", 0.95, Simultaneity::Simultaneous, false);
        assert!(s.contains("with probability at least 0.95, at every recorded time"));
        assert!(s.contains("ideal-model value of Z_5 lies within the reported interval"));
        let p = claim_sentence("Z_5", 0.9, Simultaneity::Pointwise, false);
        assert!(p.contains("at each recorded time separately, with probability at least 0.9,"));
        assert!(p.contains("not simultaneous"));
        let bad = claim_sentence("Z_5", 0.95, Simultaneity::Simultaneous, true);
        assert!(bad.starts_with("The data contradict the noise record"));
        assert!(bad.ends_with(&s));
    }

    #[test]
    fn what_is_not_covered_includes_the_three_named_gaps() {
        let all = not_covered().join(" ");
        for gap in ["Decoherence", "preparation and measurement", "correlated"] {
            assert!(all.contains(gap), "{gap}");
        }
    }
}
