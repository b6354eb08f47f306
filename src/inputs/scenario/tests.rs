//! Unit tests of the scenario reader.

use super::*;
use crate::model::noise::Amplitude;
use serde_json::Value;

pub(crate) fn example() -> Value {
    serde_json::json!({
        "format": "quassay-scenario",
        "format_version": 1,
        "run_id": "invented-chain-4",
        "description": "invented example",
        "time_unit": "us",
        "energy_unit": "MHz",
        "lattice": {"geometry": "chain", "shape": [4], "boundary": "open"},
        "hamiltonian": {"J": 1.0, "anisotropy": 0.5, "hx": 0.2, "hz": [0.0, 0.1, 0.0, 0.1]},
        "initial_state": "neel",
        "times": {"start": 0.0, "stop": 1.0, "count": 5},
        "observables": [
            {"name": "Z_0", "pauli": "Z", "sites": [0]},
            {"name": "stag", "pauli": "Z", "over": "each_site", "weights": "staggered_mean"}
        ],
        "realizations": 3,
        "shots": 100,
        "seed": 7,
        "noise": {
            "format": "quassay-noise",
            "format_version": 1,
            "frequency_unit": "kHz",
            "redrawn": "every_realization",
            "sources": [{
                "name": "detuning", "acts_on": "each_site", "operator": "Z",
                "amplitude": 5.0, "distribution": {"family": "uniform"},
                "mean_offset": 0.0, "mean_offset_uncertainty": 0.0
            }]
        },
        "true_noise": {"scale": 3.0}
    })
}

#[test]
fn the_example_parses_with_neel_state_and_sorted_observables() {
    let s = scenario_from_value(&example()).unwrap();
    assert_eq!(s.lattice.n_sites(), 4);
    assert_eq!(
        s.initial_state,
        [
            SiteState::Zero,
            SiteState::One,
            SiteState::Zero,
            SiteState::One
        ]
    );
    assert_eq!(s.times, [0.0, 0.25, 0.5, 0.75, 1.0]);
    assert_eq!(s.observables[0].name, "Z_0");
    let stag = &s.observables[1];
    assert_eq!(stag.terms.len(), 4);
    assert_eq!(stag.terms[1].weight, -0.25);
    assert_eq!(s.noise.sources[0].operator_spectrum, [-1.0, 1.0]);
    assert_eq!(s.true_noise.sources[0].amplitude, Amplitude::Scalar(15.0));
    assert_eq!(s.true_operators, [NoiseOperator::Z]);
}

#[test]
fn every_problem_is_reported_with_its_pointer() {
    let mut v = example();
    v["colour"] = serde_json::json!("blue");
    v["initial_state"] = serde_json::json!("up");
    v["noise"]["sources"][0]["operator"] = serde_json::json!("W");
    v["observables"][0]["sites"] = serde_json::json!([9]);
    let ps = scenario_from_value(&v).unwrap_err();
    let paths: Vec<&str> = ps.iter().map(|p| p.path.as_str()).collect();
    assert!(paths.contains(&"/colour"), "{ps:?}");
    assert!(paths.contains(&"/initial_state"), "{ps:?}");
    assert!(paths.contains(&"/noise/sources/0/operator"), "{ps:?}");
    assert!(paths.contains(&"/observables/0/sites"), "{ps:?}");
}

#[test]
fn mixed_bases_in_one_average_are_rejected() {
    let mut v = example();
    v["observables"][1] = serde_json::json!({"name": "m", "pauli": "Z", "over": [[0]]});
    v["observables"]
        .as_array_mut()
        .unwrap()
        .push(serde_json::json!(
            {"name": "bad", "pauli": "ZX", "over": [[0, 1], [1, 2]]}
        ));
    let ps = scenario_from_value(&v).unwrap_err();
    assert_eq!(ps.len(), 1, "{ps:?}");
    assert_eq!(ps[0].path, "/observables/2/over");
}

#[test]
fn extra_true_sources_are_checked_and_appended() {
    let mut v = example();
    v["true_noise"] = serde_json::json!({"extra_sources": [{
        "name": "hop", "acts_on": "each_bond", "operator": "XX+YY", "amplitude": 1.0,
        "distribution": {"family": "normal", "sigma": 1.0},
        "mean_offset": 0.0, "mean_offset_uncertainty": 0.0
    }]});
    let s = scenario_from_value(&v).unwrap();
    assert_eq!(s.true_noise.sources.len(), 2);
    assert_eq!(s.true_noise.sources[1].operator_spectrum, [-2.0, 2.0]);
    v["true_noise"]["extra_sources"][0]["operator"] = serde_json::json!("Z");
    let ps = scenario_from_value(&v).unwrap_err();
    assert_eq!(ps[0].path, "/true_noise/extra_sources/0/operator", "{ps:?}");
}

#[test]
fn a_preparation_error_is_read_and_checked() {
    let mut v = example();
    assert_eq!(scenario_from_value(&v).unwrap().preparation_error, None);
    v["preparation_error"] = serde_json::json!({"flip_probability": 0.05});
    let s = scenario_from_value(&v).unwrap();
    assert_eq!(
        s.preparation_error,
        Some(PreparationError {
            flip_probability: 0.05
        })
    );
    for (bad, pointer) in [
        (
            serde_json::json!({"flip_probability": 1.5}),
            "/preparation_error/flip_probability",
        ),
        (
            serde_json::json!({"flip_probability": -0.1}),
            "/preparation_error/flip_probability",
        ),
        (
            serde_json::json!({"flip_probability": "0.1"}),
            "/preparation_error/flip_probability",
        ),
        (serde_json::json!({}), "/preparation_error/flip_probability"),
        (
            serde_json::json!({"flip_probability": 0.1, "per_site": true}),
            "/preparation_error/per_site",
        ),
        (serde_json::json!(0.1), "/preparation_error"),
    ] {
        v["preparation_error"] = bad.clone();
        v["colour"] = serde_json::json!("blue");
        let ps = scenario_from_value(&v).unwrap_err();
        let paths: Vec<&str> = ps.iter().map(|p| p.path.as_str()).collect();
        // Collected with the other problems of the file.
        assert_eq!(paths, ["/colour", pointer], "{bad}");
    }
}

#[test]
fn a_flip_is_x_on_the_single_site_state() {
    // X|0⟩ = |1⟩, X|+i⟩ = i|−i⟩, X|±⟩ = ±|±⟩ (the eigenvalues of X).
    let pairs = [
        (SiteState::Zero, SiteState::One),
        (SiteState::PlusI, SiteState::MinusI),
        (SiteState::Plus, SiteState::Plus),
        (SiteState::Minus, SiteState::Minus),
    ];
    for (a, b) in pairs {
        assert_eq!(a.flipped(), b);
        assert_eq!(b.flipped(), a);
    }
}
