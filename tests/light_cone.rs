//! Integration tests of the light-cone statement in certificates (docs/method.md §5):
//! simulated runs (invented scenarios) certified by the binary, checked against the exact
//! simulation that made them (`truth.h5`: the ideal trace and the exact expectation of every
//! realization's noise draw), against the schema, and re-verified.
//!
//! The chain is long enough, and its couplings weak enough, that the Lieb–Robinson light cone
//! of the middle site is much smaller than the chain at the early times: there the light-cone
//! statement must be the one used, and must be smaller than the global one.

use std::path::Path;

use serde_json::{json, Value};

use crate::util::{
    assert_holds_on_exact_simulation, certified, numbers, observable, quassay, scratch, strings,
};

/// Tolerance of the exact simulation (the propagator is exact to about 1e-10 in the state).
const SIM_TOL: f64 = 1e-8;

/// An invented scenario: a 12-site XXZ chain (J = 0.05 MHz, Δ = 0.5) from a Néel state, a
/// uniform Z detuning on every site and a two-point ZZ jitter on every bond, redrawn every
/// realization.
fn chain_scenario(times: Value) -> Value {
    json!({
        "format": "quassay-scenario", "format_version": 1,
        "run_id": "invented-light-cone-chain12",
        "description": "Invented test scenario: a weakly coupled 12-site XXZ chain",
        "time_unit": "us", "energy_unit": "MHz",
        "lattice": {"geometry": "chain", "shape": [12], "boundary": "open"},
        "hamiltonian": {"J": 0.05, "anisotropy": 0.5},
        "initial_state": "neel",
        "times": times,
        "observables": [
            {"name": "Z_6", "pauli": "Z", "sites": [6]},
            {"name": "ZZ_5_6", "pauli": "ZZ", "sites": [5, 6]},
            {"name": "magnetisation", "pauli": "Z", "over": "each_site", "weights": "mean"}
        ],
        "realizations": 20, "shots": 4000, "seed": 4242,
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

/// Certifies the simulated run in `dir`; returns the summary and the certificate, after
/// checking it against the schema and its digest against its body.
fn certify(dir: &Path) -> (String, Value) {
    let out = quassay()
        .arg("certify")
        .arg(dir.join("run.h5"))
        .arg("--noise")
        .arg(dir.join("noise.json"))
        .assert()
        .code(0);
    let stdout = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    let path = dir.join("run.cert.json");
    // Schema (schemas/certificate.schema.json) and digest (RFC 8785 + FIPS 180-4 SHA-256).
    let cert = certified(&path);
    (stdout, cert)
}

/// `quassay verify` reproduces the certificate byte for byte.
fn verifies(dir: &Path) {
    let out = quassay()
        .arg("verify")
        .arg(dir.join("run.cert.json"))
        .assert()
        .code(0);
    let stdout = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    assert!(stdout.contains("identical, byte for byte"), "{stdout}");
}

#[test]
fn a_local_observable_in_a_long_chain_gets_the_smaller_light_cone_statement_and_covers_the_truth() {
    let dir = scratch();
    let d = dir.path();
    simulate(d, &chain_scenario(json!([0.0, 0.25, 0.5, 1.0, 2.0, 4.0])));
    let (stdout, cert) = certify(d);
    let times = numbers(&cert["body"]["run"]["times"]);
    let n_t = times.len();

    // Global V_noise of one draw, computed here from the record (docs/checks.md with e = s_O t):
    // Σ δ² σ² (s_O t)², σ² = 1/3 for uniform, 1 for two-point; δ = 2π · amplitude in rad/us.
    let two_pi = 2.0 * std::f64::consts::PI;
    let (d_site, d_bond) = (two_pi * 2e-3, two_pi * 0.5e-3);
    let es_rate = 12.0 * d_site * d_site / 3.0 + 11.0 * d_bond * d_bond;
    let checks = cert["body"]["checks"]["observables"].as_array().unwrap();

    let mut light_cone_points = 0;
    for name in ["Z_6", "ZZ_5_6"] {
        let o = observable(&cert, name);
        let used = strings(&o["statement_used"]);
        let e_avg = numbers(&o["e_avg"]);
        let global = numbers(&o["e_avg_global"]);
        let local = numbers(&o["e_avg_light_cone"]);
        let lc = o["light_cone"].as_str().unwrap();
        assert!(lc.starts_with("computed"), "{name}: {lc}");
        // t = 0: both statements are 0, and a tie keeps the global one.
        assert_eq!(used[0], "global");
        assert_eq!(e_avg[0], 0.0);
        for k in 0..n_t {
            assert_eq!(e_avg[k], global[k].min(local[k]), "{name} k={k}");
            let expected = if local[k] < global[k] {
                "light_cone"
            } else {
                "global"
            };
            assert_eq!(used[k], expected, "{name} k={k}");
        }
        // The early times: the light cone of the middle of the chain is small, so the
        // light-cone statement is used and is at least 1.5 times smaller (measured: about 3x
        // at t = 0.25 us, 2x at t = 1 us).
        for k in 1..=3 {
            assert_eq!(used[k], "light_cone", "{name} t={}", times[k]);
            assert!(
                e_avg[k] * 1.5 < global[k],
                "{name} t={}: light cone {} vs global {}",
                times[k],
                e_avg[k],
                global[k]
            );
        }
        light_cone_points += used.iter().filter(|s| **s == "light_cone").count();

        // Against the exact simulation.
        assert_holds_on_exact_simulation(d, name, o, &times, &e_avg, SIM_TOL);

        // The consistency check's V_noise: never above the global Efron–Stein sum, and below
        // it where the light cone is used.
        let oc = checks.iter().find(|c| c["name"] == name).unwrap();
        let v_noise = numbers(&oc["variance"]["v_noise"]);
        let s_o = o["spread"].as_f64().unwrap();
        for k in 0..n_t {
            let g = es_rate * (s_o * times[k]).powi(2);
            assert!(v_noise[k] <= g * (1.0 + 1e-12), "{name} k={k}");
            if used[k] == "light_cone" {
                assert!(v_noise[k] < 0.9 * g, "{name} k={k}: {} vs {g}", v_noise[k]);
            }
        }
    }

    // A magnetisation's support is every site: the light cone of the whole support gains
    // nothing, so where a light-cone statement is used it is the term-by-term one (tests/sums.rs
    // tests it further), and it is never above the global one.
    let m = observable(&cert, "magnetisation");
    let lc = m["light_cone"].as_str().unwrap();
    assert!(lc.contains("sum of 12 local terms"), "{lc}");
    let used = strings(&m["statement_used"]);
    let forms = strings(&m["term_by_term"]["form_used"]);
    let (e_avg, global) = (numbers(&m["e_avg"]), numbers(&m["e_avg_global"]));
    for k in 0..n_t {
        assert!(e_avg[k] <= global[k], "magnetisation k={k}");
        if used[k] == "light_cone" {
            assert_eq!(forms[k], "term_by_term", "magnetisation k={k}");
        }
    }
    light_cone_points += used.iter().filter(|s| **s == "light_cone").count();

    // The summary says which statement was used, with the count of points.
    let line = format!(
        "light-cone statement at {light_cone_points} of {} points, global elsewhere",
        3 * n_t
    );
    assert!(stdout.contains(&line), "{stdout}");
    verifies(d);
}

/// Sets the run's `/hamiltonian` attribute `interaction_range` (with the hdf5 library).
fn set_interaction_range(run: &Path, range: i64) {
    let f = hdf5::File::open_rw(run).unwrap();
    let g = f.group("hamiltonian").unwrap();
    g.delete_attr("interaction_range").unwrap();
    g.new_attr::<i64>()
        .create("interaction_range")
        .unwrap()
        .write_scalar(&range)
        .unwrap();
}

#[test]
fn without_light_cone_bounds_every_point_is_global_and_the_reason_is_stated() {
    let times = json!([0.0, 0.25, 0.5]);
    // (what is changed, the words the reason must contain)
    let mut longer_range = chain_scenario(times.clone());
    longer_range["realizations"] = json!(4);
    let mut unbounded_bonds = longer_range.clone();
    unbounded_bonds["noise"]["sources"][1]["distribution"] =
        json!({"family": "normal", "sigma": 1.0});
    let cases = [
        (longer_range, true, "interaction_range = 2"),
        (unbounded_bonds, false, "unbounded family `normal`"),
    ];
    for (scenario, set_range, reason) in cases {
        let dir = scratch();
        let d = dir.path();
        simulate(d, &scenario);
        if set_range {
            set_interaction_range(&d.join("run.h5"), 2);
        }
        let (stdout, cert) = certify(d);
        if set_range {
            assert_eq!(cert["body"]["run"]["hamiltonian"]["interaction_range"], 2);
        }
        for o in cert["body"]["observables"].as_array().unwrap() {
            let name = o["name"].as_str().unwrap();
            assert!(
                strings(&o["statement_used"]).iter().all(|s| *s == "global"),
                "{name}"
            );
            let lc = o["light_cone"].as_str().unwrap();
            assert!(lc.starts_with("not available"), "{name}: {lc}");
            assert!(lc.contains(reason), "{name}: {lc}");
            assert!(o.get("e_avg_light_cone").is_none(), "{name}");
            assert_eq!(numbers(&o["e_avg"]), numbers(&o["e_avg_global"]));
        }
        assert!(
            stdout.contains("global statement at every time"),
            "{stdout}"
        );
        verifies(d);
    }
}
