//! Integration tests for `quassay simulate` and the state-vector simulator.
//!
//! Outside references: SciPy's `expm_multiply` on NumPy Kronecker-product Hamiltonians
//! (`tests/reference/propagation/make_fixtures.py`, committed with its output `cases.json`),
//! and the closed form of a spin precessing about Z (bounds.md, worked example "one site, no
//! Hamiltonian"). All scenarios are invented.

use std::path::Path;

use num_complex::Complex64;
use serde_json::{json, Value};

use quassay::inputs::scenario::{NoiseOperator, SiteState};
use quassay::simulate::hamiltonian::{Operator, PauliSum};
use quassay::simulate::pauli::PauliString;
use quassay::simulate::propagate::{evolve, Workspace, DEFAULT_TOLERANCE};
use quassay::simulate::run::{add_noise_term, product_state};

use crate::util::{entries, quassay, reference, scratch};

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn sites(v: &Value) -> Vec<usize> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_u64().unwrap() as usize)
        .collect()
}

#[test]
fn propagation_matches_scipy_expm_multiply_on_three_cases() {
    let text = std::fs::read_to_string(reference("propagation/cases.json")).unwrap();
    let fixtures: Value = serde_json::from_str(&text).unwrap();
    let cases = fixtures["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 3);
    for case in cases {
        let name = case["name"].as_str().unwrap();
        let n = case["n_sites"].as_u64().unwrap() as usize;
        let bonds: Vec<[u32; 2]> = case["bonds"]
            .as_array()
            .unwrap()
            .iter()
            .map(|b| {
                let s = sites(b);
                [s[0] as u32, s[1] as u32]
            })
            .collect();
        let mut h = PauliSum::xxz(
            &bonds,
            &numbers(&case["J"]),
            case["anisotropy"].as_f64().unwrap(),
            &numbers(&case["hx"]),
            &numbers(&case["hz"]),
        );
        for t in case["extra_terms"].as_array().unwrap() {
            let op = NoiseOperator::parse(t["operator"].as_str().unwrap()).unwrap();
            add_noise_term(
                &mut h,
                op,
                &sites(&t["sites"]),
                t["coefficient"].as_f64().unwrap(),
            );
        }
        let op = Operator::compile(&h, n);
        let labels: Vec<SiteState> = case["initial_state"]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| SiteState::parse(l.as_str().unwrap()).unwrap())
            .collect();
        let mut psi = product_state(&labels);
        let observables: Vec<PauliString> = case["observables"]
            .as_array()
            .unwrap()
            .iter()
            .map(|o| {
                PauliString::from_letters(o["pauli"].as_str().unwrap(), &sites(&o["sites"]))
                    .unwrap()
            })
            .collect();
        let mut work = Workspace::default();
        let mut now = 0.0;
        for (k, t) in numbers(&case["times"]).into_iter().enumerate() {
            evolve(&op, &mut psi, t - now, DEFAULT_TOLERANCE, &mut work);
            now = t;
            let expected = numbers(&case["expectations"][k]);
            for (p, e) in observables.iter().zip(expected) {
                let got = p.expectation(&psi);
                assert!(
                    (got - e).abs() < 1e-8,
                    "{name}, time {t}: {got} vs SciPy {e}"
                );
            }
        }
        let re = numbers(&case["final_state_re"]);
        let im = numbers(&case["final_state_im"]);
        for (b, amp) in psi.iter().enumerate() {
            let want = Complex64::new(re[b], im[b]);
            assert!(
                (amp - want).norm() < 1e-8,
                "{name}, amplitude {b}: {amp} vs SciPy {want}"
            );
        }
    }
}

/// An invented scenario: a 6-site XXZ chain with site detunings, small enough for debug tests.
fn chain_scenario() -> Value {
    json!({
        "format": "quassay-scenario",
        "format_version": 1,
        "run_id": "invented-chain-6",
        "description": "Invented test scenario",
        "time_unit": "us",
        "energy_unit": "MHz",
        "lattice": {"geometry": "chain", "shape": [6], "boundary": "open"},
        "hamiltonian": {"J": 0.5, "anisotropy": 0.5, "hx": 0.1, "hz": 0.0},
        "initial_state": "neel",
        "times": {"start": 0.0, "stop": 1.0, "count": 5},
        "observables": [
            {"name": "Z_2", "pauli": "Z", "sites": [2]},
            {"name": "staggered_z", "pauli": "Z", "over": "each_site", "weights": "staggered_mean"},
            {"name": "zz_nn", "pauli": "ZZ", "over": "each_bond"}
        ],
        "realizations": 4,
        "shots": 200,
        "seed": 11,
        "noise": {
            "format": "quassay-noise",
            "format_version": 1,
            "frequency_unit": "kHz",
            "redrawn": "every_realization",
            "sources": [{
                "name": "site detuning", "acts_on": "each_site", "operator": "Z",
                "amplitude": 30.0, "distribution": {"family": "uniform"},
                "mean_offset": 0.0, "mean_offset_uncertainty": 0.0
            }]
        },
        "true_noise": {"scale": 2.0}
    })
}

fn write_json(dir: &Path, name: &str, v: &Value) -> std::path::PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, serde_json::to_string_pretty(v).unwrap()).unwrap();
    p
}

fn read_f64(file: &hdf5::File, path: &str) -> Vec<f64> {
    file.dataset(path).unwrap().read_raw::<f64>().unwrap()
}

#[test]
fn simulate_is_reproducible_bit_for_bit_for_a_fixed_seed() {
    let dir = scratch();
    let sc = write_json(dir.path(), "s.json", &chain_scenario());
    for out in ["a", "b"] {
        quassay()
            .arg("simulate")
            .arg(&sc)
            .arg("-o")
            .arg(dir.path().join(out))
            .assert()
            .success();
    }
    assert_eq!(
        entries(&dir.path().join("a")),
        ["noise.json", "run.h5", "truth.h5"]
    );
    let read =
        |d: &str| quassay::inputs::run_file::read_run(&dir.path().join(d).join("run.h5")).unwrap();
    let (ra, rb) = (read("a"), read("b"));
    assert_eq!(ra, rb);
    // Bitwise, not just ==: compare the bit patterns of every value.
    for (oa, ob) in ra.observables.iter().zip(&rb.observables) {
        let ba: Vec<u64> = oa.values.iter().map(|x| x.to_bits()).collect();
        let bb: Vec<u64> = ob.values.iter().map(|x| x.to_bits()).collect();
        assert_eq!(ba, bb);
    }
    // The truth file records no timestamps, so its bytes agree too.
    let ta = std::fs::read(dir.path().join("a/truth.h5")).unwrap();
    let tb = std::fs::read(dir.path().join("b/truth.h5")).unwrap();
    assert_eq!(ta, tb);
    assert_eq!(
        std::fs::read(dir.path().join("a/noise.json")).unwrap(),
        std::fs::read(dir.path().join("b/noise.json")).unwrap()
    );
    // Another seed gives other data.
    quassay()
        .args(["simulate", "--seed", "12"])
        .arg(&sc)
        .arg("-o")
        .arg(dir.path().join("c"))
        .assert()
        .success();
    let rc = read("c");
    assert_ne!(ra.observables[0].values, rc.observables[0].values);
    // The ideal trace does not depend on the seed.
    assert_eq!(ra.observables[0].ideal, rc.observables[0].ideal);
}

#[test]
fn the_run_file_carries_the_bond_norm_terms_and_the_declared_record() {
    let dir = scratch();
    let sc = write_json(dir.path(), "s.json", &chain_scenario());
    let out = dir.path().join("out");
    quassay()
        .arg("simulate")
        .arg(&sc)
        .arg("-o")
        .arg(&out)
        .assert()
        .success();
    let run = quassay::inputs::run_file::read_run(&out.join("run.h5")).unwrap();
    // J = 0.5 MHz, Δ = 0.5: centred bond norm 0.5 × 2 = 1 (in the energy unit).
    assert_eq!(run.hamiltonian.bond_norm_max, 1.0);
    assert!(run
        .description
        .as_deref()
        .unwrap()
        .contains("Simulated data"));
    let stag = run
        .observables
        .iter()
        .find(|o| o.name == "staggered_z")
        .unwrap();
    // Exactly ±(6 × 1/6) as summed in floating point, i.e. ±1 to one ulp.
    assert!((stag.spectrum_min + 1.0).abs() < 1e-15 && (stag.spectrum_max - 1.0).abs() < 1e-15);
    assert_eq!(stag.terms.as_ref().unwrap().supports.len(), 6);
    assert_eq!(stag.support, [0, 1, 2, 3, 4, 5]);
    // Néel state: staggered magnetisation 1 at t = 0, exactly, in the ideal trace.
    assert!((stag.ideal.as_ref().unwrap()[0] - 1.0).abs() < 1e-15);
    let zz = run.observables.iter().find(|o| o.name == "zz_nn").unwrap();
    assert!((zz.ideal.as_ref().unwrap()[0] + 1.0).abs() < 1e-15);
    // noise.json is the declared record (amplitude 30, not the true 60), without operators.
    let noise = quassay::inputs::noise_record::read_noise_record(&out.join("noise.json")).unwrap();
    assert_eq!(
        noise.sources[0].amplitude,
        quassay::model::noise::Amplitude::Scalar(30.0)
    );
    let text = std::fs::read_to_string(out.join("noise.json")).unwrap();
    assert!(!text.contains("operator\""));
    // truth.h5 holds the true amplitude 60 kHz = 2π·0.06 rad/us per site.
    let truth = hdf5::File::open(out.join("truth.h5")).unwrap();
    let amp = read_f64(&truth, "noise/amplitude");
    assert_eq!(amp.len(), 6);
    assert!((amp[0] - std::f64::consts::TAU * 0.06).abs() < 1e-15);
    let draws = truth.dataset("noise/draws").unwrap().shape();
    assert_eq!(draws, [4, 6]);
}

#[test]
fn a_detuned_spin_dephases_exactly_as_the_closed_form_says() {
    // One site, H = 0, |+⟩, noise a·g·Z: ⟨X(t)⟩ = cos(2 a g t) (bounds.md, worked example).
    let mut v = chain_scenario();
    v["lattice"] = json!({"geometry": "chain", "shape": [1], "boundary": "open"});
    v["hamiltonian"] = json!({"J": 0.0, "anisotropy": 0.0});
    v["initial_state"] = json!("+");
    v["observables"] = json!([{"name": "X_0", "pauli": "X", "sites": [0]}]);
    v["times"] = json!([0.0, 1.0, 2.5]);
    v["realizations"] = json!(5);
    v["true_noise"] = json!({"scale": 1.0});
    let dir = scratch();
    let sc = write_json(dir.path(), "s.json", &v);
    let out = dir.path().join("out");
    quassay()
        .arg("simulate")
        .arg(&sc)
        .arg("-o")
        .arg(&out)
        .assert()
        .success();
    let truth = hdf5::File::open(out.join("truth.h5")).unwrap();
    let g = read_f64(&truth, "noise/draws");
    let exact = read_f64(&truth, "observables/X_0/exact");
    let a = std::f64::consts::TAU * 0.03; // 30 kHz in rad/us
    for r in 0..5 {
        for (k, t) in [0.0, 1.0, 2.5].iter().enumerate() {
            let want = (2.0 * a * g[r] * t).cos();
            assert!((exact[r * 3 + k] - want).abs() < 1e-10, "r {r} t {t}");
        }
    }
}

#[test]
fn every_shot_and_once_modes_run_and_stay_in_the_spectrum() {
    for mode in ["every_shot", "once"] {
        let mut v = chain_scenario();
        v["noise"]["redrawn"] = json!(mode);
        v["shots"] = json!(20);
        v["realizations"] = json!(3);
        let dir = scratch();
        let sc = write_json(dir.path(), "s.json", &v);
        let out = dir.path().join("out");
        quassay()
            .arg("simulate")
            .arg(&sc)
            .arg("-o")
            .arg(&out)
            .assert()
            .success();
        let run = quassay::inputs::run_file::read_run(&out.join("run.h5")).unwrap();
        for o in &run.observables {
            assert!(o
                .values
                .iter()
                .all(|&x| x >= o.spectrum_min - 1e-12 && x <= o.spectrum_max + 1e-12));
        }
        let truth = hdf5::File::open(out.join("truth.h5")).unwrap();
        let rows = truth.dataset("noise/draws").unwrap().shape()[0];
        assert_eq!(rows, if mode == "once" { 1 } else { 3 * 20 }, "{mode}");
        if mode == "once" {
            // One draw for all realizations: the exact noisy values agree across realizations.
            let e = read_f64(&truth, "observables/Z_2/exact");
            assert_eq!(&e[0..5], &e[5..10]);
        }
    }
}

fn assert_rejected(v: &Value, pointer: &str) {
    let dir = scratch();
    let sc = write_json(dir.path(), "s.json", v);
    let out = dir.path().join("out");
    let assert = quassay()
        .arg("simulate")
        .arg(&sc)
        .arg("-o")
        .arg(&out)
        .assert()
        .code(1);
    let stderr = String::from_utf8_lossy(&assert.get_output().stderr).into_owned();
    assert!(stderr.contains(pointer), "expected {pointer} in: {stderr}");
    assert!(
        stderr.contains("s.json"),
        "the message names the file: {stderr}"
    );
    assert!(!out.exists(), "nothing may be written");
}

#[test]
fn bad_scenarios_exit_1_with_the_json_pointer_and_write_nothing() {
    let mut v = chain_scenario();
    v["hamiltonain"] = json!({});
    assert_rejected(&v, "/hamiltonain");

    let mut v = chain_scenario();
    v["lattice"]["shape"] = json!([21]);
    assert_rejected(&v, "/lattice/shape");

    let mut v = chain_scenario();
    v["noise"]["sources"][0]["operator"] = json!("Q");
    assert_rejected(&v, "/noise/sources/0/operator");

    let mut v = chain_scenario();
    v["initial_state"] = json!(["0", "1", "up", "1", "0", "1"]);
    assert_rejected(&v, "/initial_state/2");

    let mut v = chain_scenario();
    v["noise"]["sources"][0]["distribution"] = json!({"family": "uniform", "width": 2});
    assert_rejected(&v, "/noise/sources/0/distribution");
}

#[test]
fn existing_outputs_are_kept_without_force() {
    let dir = scratch();
    let sc = write_json(dir.path(), "s.json", &chain_scenario());
    let out = dir.path().join("out");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("run.h5"), b"keep me").unwrap();
    quassay()
        .arg("simulate")
        .arg(&sc)
        .arg("-o")
        .arg(&out)
        .assert()
        .code(1);
    assert_eq!(std::fs::read(out.join("run.h5")).unwrap(), b"keep me");
    assert_eq!(entries(&out), ["run.h5"]);
    quassay()
        .arg("simulate")
        .arg(&sc)
        .arg("-o")
        .arg(&out)
        .arg("--force")
        .assert()
        .success();
    assert_eq!(entries(&out), ["noise.json", "run.h5", "truth.h5"]);
}

#[test]
fn the_schema_accepts_the_test_scenario_and_rejects_an_unknown_key() {
    let text =
        std::fs::read_to_string(crate::util::repo().join("schemas/scenario.schema.json")).unwrap();
    let schema: Value = serde_json::from_str(&text).unwrap();
    assert!(jsonschema::meta::is_valid(&schema));
    let validator = jsonschema::draft202012::new(&schema).unwrap();
    assert!(validator.is_valid(&chain_scenario()));
    let mut v = chain_scenario();
    v["hamiltonain"] = json!({});
    assert!(!validator.is_valid(&v));
    let mut v = chain_scenario();
    v["noise"]["sources"][0]["operator"] = json!("Q");
    assert!(!validator.is_valid(&v));
}
