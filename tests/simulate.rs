//! Integration tests for `quassay simulate` and the state-vector simulator.
//!
//! Outside references: SciPy's `expm_multiply` on NumPy Kronecker-product Hamiltonians
//! (`tests/reference/propagation/make_fixtures.py`, committed with its output `cases.json`),
//! and the closed form of a spin precessing about Z (the one-site example of
//! docs/method.md §3). All scenarios are invented.

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
    let c = quassay()
        .args(["simulate", "--seed", "12"])
        .arg(&sc)
        .arg("-o")
        .arg(dir.path().join("c"))
        .assert()
        .success();
    // Standard error is a pipe here: no progress bar (crate::progress draws on terminals only).
    assert!(
        c.get_output().stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&c.get_output().stderr)
    );
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
    // One site, H = 0, |+⟩, noise a·g·Z: ⟨X(t)⟩ = cos(2 a g t) (docs/method.md §3, "Check").
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

// ---- Preparation error (each site flipped with probability q in every shot) ----

/// The datasets of two HDF5 files agree bit for bit (float64 and int64 datasets by name).
fn same_f64_datasets(a: &hdf5::File, b: &hdf5::File, names: &[&str]) {
    for name in names {
        let x: Vec<u64> = read_f64(a, name).iter().map(|v| v.to_bits()).collect();
        let y: Vec<u64> = read_f64(b, name).iter().map(|v| v.to_bits()).collect();
        assert_eq!(x, y, "{name}");
    }
}

fn simulate_into(scenario: &Path, out: &Path) {
    quassay()
        .arg("simulate")
        .arg(scenario)
        .arg("-o")
        .arg(out)
        .assert()
        .success();
}

#[test]
fn without_a_flip_probability_the_bundled_example_is_reproduced_exactly() {
    // example_runs/chain12 was generated before the preparation error existed; without the
    // key, and with q = 0, the run must be the same bit for bit.
    let example = crate::util::repo().join("example_runs/chain12");
    let dir = scratch();
    let plain = dir.path().join("plain");
    simulate_into(&example.join("scenario.json"), &plain);
    let mut v: Value =
        serde_json::from_str(&std::fs::read_to_string(example.join("scenario.json")).unwrap())
            .unwrap();
    v["preparation_error"] = json!({"flip_probability": 0.0});
    let zero = dir.path().join("zero");
    simulate_into(&write_json(dir.path(), "q0.json", &v), &zero);

    let want = quassay::inputs::run_file::read_run(&example.join("run.h5")).unwrap();
    for out in [&plain, &zero] {
        let got = quassay::inputs::run_file::read_run(&out.join("run.h5")).unwrap();
        assert_eq!(got, want);
        for (a, b) in got.observables.iter().zip(&want.observables) {
            let ba: Vec<u64> = a.values.iter().map(|x| x.to_bits()).collect();
            let bb: Vec<u64> = b.values.iter().map(|x| x.to_bits()).collect();
            assert_eq!(ba, bb, "{}", a.name);
        }
        let t_want = hdf5::File::open(example.join("truth.h5")).unwrap();
        let t_got = hdf5::File::open(out.join("truth.h5")).unwrap();
        same_f64_datasets(
            &t_got,
            &t_want,
            &[
                "times",
                "noise/draws",
                "observables/Z_6/exact",
                "observables/ZZ_5_6/exact",
                "observables/staggered_z/exact",
                "observables/staggered_z/ideal",
            ],
        );
    }
    // Without the key the truth file is byte for byte the bundled one.
    assert!(hdf5::File::open(plain.join("truth.h5"))
        .unwrap()
        .attr("flip_probability")
        .is_err());
    // With q = 0 it says so, and lists one pattern (nothing flipped) of all shots per
    // realization.
    let t = hdf5::File::open(zero.join("truth.h5")).unwrap();
    assert_eq!(
        t.attr("flip_probability")
            .unwrap()
            .read_scalar::<f64>()
            .unwrap(),
        0.0
    );
    let shots = t
        .dataset("preparation/shots")
        .unwrap()
        .read_raw::<u64>()
        .unwrap();
    assert_eq!(shots, vec![1000; 40]);
}

/// An invented idle register: `n` sites, no coupling, no field, noise of amplitude 0, all
/// sites in |0⟩, observables Z_0 and the mean magnetisation, times 0 and 1 µs.
fn idle_scenario(n: usize, q: f64, realizations: u64, shots: u64, redrawn: &str) -> Value {
    let mut v = chain_scenario();
    v["lattice"] = json!({"geometry": "chain", "shape": [n], "boundary": "open"});
    v["hamiltonian"] = json!({"J": 0.0, "anisotropy": 0.0});
    v["initial_state"] = json!("0");
    v["times"] = json!([0.0, 1.0]);
    v["observables"] = json!([
        {"name": "Z_0", "pauli": "Z", "sites": [0]},
        {"name": "magnetisation", "pauli": "Z", "over": "each_site", "weights": "mean"}
    ]);
    v["realizations"] = json!(realizations);
    v["shots"] = json!(shots);
    v["noise"]["redrawn"] = json!(redrawn);
    v["noise"]["sources"][0]["amplitude"] = json!(0.0);
    v["true_noise"] = json!({"scale": 1.0});
    v["preparation_error"] = json!({"flip_probability": q});
    v
}

#[test]
fn flipped_preparations_of_an_idle_register_match_the_closed_form() {
    // Closed form: with H = 0 and no noise, Z_0 of a shot is −1 if site 0 was flipped and +1
    // otherwise, so E[shot mean] = 1 − 2q; the magnetisation of pattern p is 1 − 2|p|/n.
    // Four sites: the weights 1/4 and all partial sums are exact in binary, so the truth
    // file's mixture must equal Σ_p N_p (1 − 2|p|/4) / S bit for bit.
    let q = 0.1;
    for (redrawn, r_count, shots) in [
        ("every_realization", 4u64, 250_000u64),
        ("once", 1, 1000),
        ("every_shot", 2, 2000),
    ] {
        let dir = scratch();
        let out = dir.path().join("out");
        let v = idle_scenario(4, q, r_count, shots, redrawn);
        simulate_into(&write_json(dir.path(), "s.json", &v), &out);
        let truth = hdf5::File::open(out.join("truth.h5")).unwrap();
        assert_eq!(
            truth
                .attr("flip_probability")
                .unwrap()
                .read_scalar::<f64>()
                .unwrap(),
            q
        );
        let g = truth.group("preparation").unwrap();
        assert_eq!(
            g.attr("flip_probability")
                .unwrap()
                .read_scalar::<f64>()
                .unwrap(),
            q
        );
        let real = g.dataset("realization").unwrap().read_raw::<i64>().unwrap();
        let counts = g.dataset("shots").unwrap().read_raw::<u64>().unwrap();
        let flipped = g.dataset("flipped").unwrap().read_2d::<u8>().unwrap();
        assert_eq!(flipped.ncols(), 4);
        let exact_z0 = read_f64(&truth, "observables/Z_0/exact");
        let exact_m = read_f64(&truth, "observables/magnetisation/exact");
        let run = quassay::inputs::run_file::read_run(&out.join("run.h5")).unwrap();
        let z0 = run.observables.iter().find(|o| o.name == "Z_0").unwrap();
        // The ideal trace is the error-free one.
        assert_eq!(z0.ideal.as_deref(), Some(&[1.0, 1.0][..]));
        let mut pooled = 0.0;
        for r in 0..r_count as usize {
            let rows: Vec<usize> = (0..real.len()).filter(|&k| real[k] == r as i64).collect();
            assert_eq!(
                rows.iter().map(|&k| counts[k]).sum::<u64>(),
                shots,
                "{redrawn} r {r}"
            );
            if redrawn == "every_shot" {
                assert_eq!(rows.len() as u64, shots);
            } else {
                // Distinct patterns, in increasing order of the mask.
                let masks: Vec<u32> = rows
                    .iter()
                    .map(|&k| (0..4).map(|i| (flipped[[k, i]] as u32) << i).sum())
                    .collect();
                assert!(masks.windows(2).all(|w| w[0] < w[1]), "{masks:?}");
            }
            let (mut sum_z0, mut sum_m) = (0i64, 0i64);
            for &k in &rows {
                let n_flip: i64 = (0..4).map(|i| flipped[[k, i]] as i64).sum();
                sum_z0 += counts[k] as i64 * (1 - 2 * flipped[[k, 0]] as i64);
                sum_m += counts[k] as i64 * (4 - 2 * n_flip); // 4 × magnetisation
            }
            let want_z0 = sum_z0 as f64 / shots as f64;
            let want_m = sum_m as f64 / 4.0 / shots as f64;
            for k in 0..2 {
                // H = 0: the same at t = 0 and t = 1.
                assert_eq!(exact_z0[r * 2 + k], want_z0, "{redrawn} r {r} t {k}");
                assert_eq!(exact_m[r * 2 + k], want_m, "{redrawn} r {r} t {k}");
                // Every shot's outcome is fixed by its pattern, so the shot mean is the
                // mixture too (2k/S − 1 against (2k − S)/S: equal to rounding).
                assert!((z0.values[[r, k]] - want_z0).abs() < 1e-15);
            }
            pooled += z0.values[[r, 0]] * shots as f64;
        }
        // Against 1 − 2q: the pooled mean of R·S independent ±1 outcomes has standard error
        // 2·√(q(1 − q)/(R·S)); 5 of them (a correct simulator fails with probability < 1e-6).
        let n_total = (r_count * shots) as f64;
        let mean = pooled / n_total;
        let se = 2.0 * (q * (1.0 - q) / n_total).sqrt();
        assert!(
            (mean - (1.0 - 2.0 * q)).abs() < 5.0 * se,
            "{redrawn}: {mean}"
        );
    }
}

#[test]
fn a_flip_probability_gives_bit_identical_output_for_a_seed_and_any_thread_count() {
    let mut v = chain_scenario();
    v["preparation_error"] = json!({"flip_probability": 0.05});
    let dir = scratch();
    let sc = write_json(dir.path(), "s.json", &v);
    for (out, threads) in [("a", "1"), ("b", "2")] {
        quassay()
            .env("RAYON_NUM_THREADS", threads)
            .arg("simulate")
            .arg(&sc)
            .arg("-o")
            .arg(dir.path().join(out))
            .assert()
            .success();
    }
    for f in ["run.h5", "truth.h5", "noise.json"] {
        assert_eq!(
            std::fs::read(dir.path().join("a").join(f)).unwrap(),
            std::fs::read(dir.path().join("b").join(f)).unwrap(),
            "{f}"
        );
    }
    // The flips change the data (Néel state: a flip at t = 0 moves the staggered
    // magnetisation off 1), not the ideal trace.
    let plain = dir.path().join("plain");
    simulate_into(
        &write_json(dir.path(), "plain.json", &chain_scenario()),
        &plain,
    );
    let a = quassay::inputs::run_file::read_run(&dir.path().join("a/run.h5")).unwrap();
    let p = quassay::inputs::run_file::read_run(&plain.join("run.h5")).unwrap();
    let stag = |r: &quassay::model::Run| {
        r.observables
            .iter()
            .find(|o| o.name == "staggered_z")
            .unwrap()
            .clone()
    };
    assert_eq!(stag(&a).ideal, stag(&p).ideal);
    // (Six terms ±1/6 add up to 1 within an ulp; one flip costs 2/6, expected drop 2q = 0.1.)
    assert!(stag(&p)
        .values
        .column(0)
        .iter()
        .all(|&x| (x - 1.0).abs() < 1e-15));
    assert!(stag(&a).values.column(0).iter().all(|&x| x < 0.99));
    assert!(a
        .description
        .as_deref()
        .unwrap()
        .contains("probability 0.05"));
}

#[test]
fn bad_flip_probabilities_exit_1_with_the_json_pointer_and_write_nothing() {
    for bad in [
        json!({"flip_probability": 1.5}),
        json!({"flip_probability": -0.1}),
    ] {
        let mut v = chain_scenario();
        v["preparation_error"] = bad;
        assert_rejected(&v, "/preparation_error/flip_probability");
    }
    let mut v = chain_scenario();
    v["preparation_error"] = json!({"flip_probability": 0.1, "per_site": [0.1]});
    assert_rejected(&v, "/preparation_error/per_site");
}

#[test]
fn the_schema_knows_the_preparation_error() {
    let text =
        std::fs::read_to_string(crate::util::repo().join("schemas/scenario.schema.json")).unwrap();
    let schema: Value = serde_json::from_str(&text).unwrap();
    let validator = jsonschema::draft202012::new(&schema).unwrap();
    let mut v = chain_scenario();
    v["preparation_error"] = json!({"flip_probability": 0.05});
    assert!(validator.is_valid(&v));
    for bad in [
        json!({"flip_probability": 1.5}),
        json!({"flip_probability": -0.1}),
        json!({"flip_probability": 0.1, "per_site": [0.1]}),
        json!({}),
    ] {
        v["preparation_error"] = bad.clone();
        assert!(!validator.is_valid(&v), "{bad}");
    }
}
