//! Integration tests of the term-by-term statement for observables that are sums of local
//! terms (docs/method.md §5, "Sums of local terms, term by term"):
//! invented scenarios simulated by `quassay simulate`, certified by the binary, checked against
//! the exact simulation that made them (`truth.h5`: the ideal trace and the exact expectation
//! of every realization's noise draw), against the schema, and re-verified.
//!
//! The lattices are weakly coupled, so at the early times each noise source matters only
//! through the few terms in its light cone: the magnetisation and the staggered magnetisation
//! must then use the term-by-term statement, smaller than both the global and the
//! whole-support ones, and still cover the exact values.

use std::path::Path;

use serde_json::{json, Value};

use crate::util::{
    assert_holds_on_exact_simulation, certified, numbers, observable, quassay, scratch, strings,
};

/// Tolerance of the exact simulation (the propagator is exact to about 1e-10 in the state).
const SIM_TOL: f64 = 1e-8;

/// An invented scenario: a weakly coupled XXZ model (J = 0.05 MHz, Δ = 0.5) on `lattice` from
/// a Néel state, a uniform Z detuning on every site and a two-point ZZ jitter on every bond,
/// redrawn every realization; the magnetisation and the staggered magnetisation.
fn scenario(run_id: &str, lattice: Value) -> Value {
    json!({
        "format": "quassay-scenario", "format_version": 1,
        "run_id": run_id,
        "description": "Invented test scenario: averaged observables on a weakly coupled lattice",
        "time_unit": "us", "energy_unit": "MHz",
        "lattice": lattice,
        "hamiltonian": {"J": 0.05, "anisotropy": 0.5},
        "initial_state": "neel",
        "times": [0.0, 0.25, 0.5, 1.0, 2.0, 4.0],
        "observables": [
            {"name": "magnetisation", "pauli": "Z", "over": "each_site", "weights": "mean"},
            {"name": "staggered", "pauli": "Z", "over": "each_site", "weights": "staggered_mean"},
            {"name": "Z_1", "pauli": "Z", "sites": [1]}
        ],
        "realizations": 20, "shots": 4000, "seed": 9191,
        "noise": {
            "format": "quassay-noise", "format_version": 1,
            "frequency_unit": "kHz", "redrawn": "every_realization",
            "sources": [
                {"name": "site detuning", "acts_on": "each_site", "operator": "Z",
                 "amplitude": 2.0, "distribution": {"family": "uniform"},
                 "mean_offset": 0.0, "mean_offset_uncertainty": 0.0},
                {"name": "coupling jitter", "acts_on": "each_bond", "operator": "ZZ",
                 "amplitude": 0.5, "distribution": {"family": "two_point"},
                 "mean_offset": 0.0, "mean_offset_uncertainty": 0.0}
            ]
        }
    })
}

/// Writes `scenario` and simulates it into `dir` (run.h5, noise.json, truth.h5).
fn simulate(dir: &Path, scenario: &Value) {
    let path = dir.join("scenario.json");
    std::fs::write(&path, serde_json::to_string_pretty(scenario).unwrap()).unwrap();
    quassay()
        .arg("simulate")
        .arg(&path)
        .arg("-o")
        .arg(dir)
        .assert()
        .success();
}

/// Certifies the simulated run in `dir`, checks the certificate against the schema and its
/// digest (SHA-256, FIPS 180-4, of the RFC 8785 form of the body), and that `verify`
/// reproduces it byte for byte.
fn certify(dir: &Path) -> Value {
    quassay()
        .arg("certify")
        .arg(dir.join("run.h5"))
        .arg("--noise")
        .arg(dir.join("noise.json"))
        .assert()
        .code(0);
    let path = dir.join("run.cert.json");
    // Schema (schemas/certificate.schema.json) and digest (RFC 8785 + FIPS 180-4 SHA-256).
    let cert = certified(&path);
    let out = quassay().arg("verify").arg(&path).assert().code(0);
    let stdout = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    assert!(stdout.contains("identical, byte for byte"), "{stdout}");
    cert
}

/// Simulates and certifies one lattice; checks the averaged observables term by term.
fn check_lattice(run_id: &str, lattice: Value, n_sites: usize) {
    let dir = scratch();
    let d = dir.path();
    simulate(d, &scenario(run_id, lattice));
    let cert = certify(d);
    let times = numbers(&cert["body"]["run"]["times"]);
    let n_t = times.len();
    for name in ["magnetisation", "staggered"] {
        let o = observable(&cert, name);
        let lc = o["light_cone"].as_str().unwrap();
        assert!(
            lc.contains(&format!("sum of {n_sites} local terms")),
            "{name}: {lc}"
        );
        let tbt = &o["term_by_term"];
        assert_eq!(tbt["terms"], n_sites);
        let used = strings(&o["statement_used"]);
        let forms = strings(&tbt["form_used"]);
        let e_avg = numbers(&o["e_avg"]);
        let global = numbers(&o["e_avg_global"]);
        let whole = numbers(&o["e_avg_light_cone"]);
        let by_term = numbers(&tbt["e_avg"]);
        for k in 0..n_t {
            // The reported statement is the smallest of the three.
            assert_eq!(
                e_avg[k],
                global[k].min(whole[k]).min(by_term[k]),
                "{name} k={k}"
            );
            let expected = match forms[k] {
                "global" => "global",
                _ => "light_cone",
            };
            assert_eq!(used[k], expected, "{name} k={k}");
        }
        // Early times: the term-by-term statement is used and is at least 2 times smaller
        // than the global and whole-support ones at t ≤ 0.5 us, 1.2 times at 1 us (each source
        // is seen by about one term of weight 1/n; measured: about 2.2x at t = 0.5 us on 3x3,
        // 1.4x at t = 1 us on 3x3, 2.5x at t = 1 us on the chain).
        for k in 1..=3 {
            assert_eq!(forms[k], "term_by_term", "{name} t={}", times[k]);
            let factor = if k <= 2 { 2.0 } else { 1.2 };
            assert!(
                factor * e_avg[k] < global[k] && factor * e_avg[k] < whole[k],
                "{name} t={}: term by term {} vs global {} and whole support {}",
                times[k],
                e_avg[k],
                global[k],
                whole[k]
            );
            // Every noise instance took the term-by-term form of its sensitivity.
            let by_form = &tbt["sources_by_form"];
            assert_eq!(numbers(&by_form["global"])[k], 0.0, "{name} k={k}");
            assert_eq!(numbers(&by_form["whole_support"])[k], 0.0, "{name} k={k}");
            assert!(numbers(&by_form["term_by_term"])[k] > 0.0, "{name} k={k}");
        }

        // Against the exact simulation.
        assert_holds_on_exact_simulation(d, name, o, &times, &e_avg, SIM_TOL);
    }
    // A single-site observable has no term structure and no term-by-term member.
    assert!(observable(&cert, "Z_1").get("term_by_term").is_none());
}

#[test]
fn averaged_observables_on_a_chain_use_the_term_by_term_statement_and_cover_the_truth() {
    check_lattice(
        "invented-sums-chain10",
        json!({"geometry": "chain", "shape": [10], "boundary": "open"}),
        10,
    );
}

#[test]
fn averaged_observables_on_a_square_lattice_use_the_term_by_term_statement_and_cover_the_truth() {
    check_lattice(
        "invented-sums-square3x3",
        json!({"geometry": "square", "shape": [3, 3], "boundary": "open"}),
        9,
    );
}
