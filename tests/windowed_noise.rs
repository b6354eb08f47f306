//! Noise drawn again during an evolution (correlation times, noise record version 3): the
//! bounds hold on exact simulations (docs/method.md §1, §3, §4, §5 "Windows").
//!
//! Outside reference: exact state-vector simulation (`simulate`, whose propagation is checked
//! against SciPy's `expm_multiply` in `tests/simulate.rs`), which draws the noise again at
//! every multiple of each source's correlation time and evolves through the window edges.
//! Invented scenarios: chains of 6, 8 and 10 sites, XXZ with fields, uniform and two-point
//! families on sites and bonds, correlation times from `t_max/100` to `t_max`, 2100
//! realizations in all, each an independent noise trajectory. At every (observable, time):
//!
//! * worst case: `|f_g(t) − f(t)| ≤ E_wc(t)` for every trajectory (probability one);
//! * one evolution: the number of trajectories with `|f_g(t) − f(t)| > E_1(t; p)` stays below
//!   the critical value of a one-sided binomial test at level 0.001, for p = 0.5, 0.2, 0.05
//!   (each trajectory exceeds with probability at most `p`, independently). `E_1` is the
//!   certificate's: the smaller of the global and light-cone statements (`evaluate_run`,
//!   pointwise at ε = p).
//!
//! One case is built so that the bound is nearly attained (one source on the observed site):
//! a bound too small by a constant factor would fail there. The thresholds are fixed and the
//! seeds too, so the outcome is deterministic.

use serde_json::{json, Value};

use quassay::bounds::confidence::Simultaneity;
use quassay::bounds::run_bounds::evaluate_run;
use quassay::inputs::scenario::scenario_from_value;
use quassay::simulate::run::simulate;

use crate::util::{binomial_critical, scenario, source};

const LEVEL: f64 = 0.001;
const P_VALUES: [f64; 3] = [0.5, 0.2, 0.05];
/// Accuracy of the exact simulation (docs/simulator.md).
const SIM_TOL: f64 = 1e-9;
/// The scenarios' last time (util::scenario: 0 to 1.5 us in 6 steps).
const T_MAX: f64 = 1.5;

/// `v` with noise record version 3 and the correlation times (us) of its sources.
fn windowed(mut v: Value, taus: &[Option<f64>]) -> Value {
    v["noise"]["format_version"] = json!(3);
    for (i, tau) in taus.iter().enumerate() {
        if let Some(tau) = tau {
            v["noise"]["sources"][i]["correlation_time"] = json!({"value": tau, "unit": "us"});
        }
    }
    v
}

struct Measured {
    /// Largest |error| / E_1(p = 0.5) over trajectories, observables and times t > 0.
    ratio: f64,
    /// Light-cone statements among the points, and all points (at p = 0.05).
    light_cone: (usize, usize),
    /// Largest E_1(p = 0.05) of the case, and the same with the correlation times removed.
    e_one_last: (f64, f64),
}

fn check(name: &str, case: &Value) -> Measured {
    let s = scenario_from_value(case).unwrap_or_else(|p| panic!("{name}: {p:?}"));
    let sim = simulate(&s, s.seed);
    let model = s.noise.expand(&sim.run.lattice, sim.run.time_unit).unwrap();
    let r = s.realizations;
    let mut m = Measured {
        ratio: 0.0,
        light_cone: (0, 0),
        e_one_last: (0.0, 0.0),
    };
    for &p in &P_VALUES {
        let b = evaluate_run(&sim.run, &model, 1.0 - p, Simultaneity::Pointwise).unwrap();
        let allowed = binomial_critical(r as u64, p, LEVEL);
        for (o, ob) in b.observables.iter().enumerate() {
            let truth = &sim.truth.observables[o];
            for (k, pt) in ob.points.iter().enumerate() {
                let mut over = 0u64;
                for j in 0..r {
                    let err = (truth.exact[[j, k]] - truth.ideal[k]).abs();
                    assert!(
                        err <= pt.e_wc + SIM_TOL,
                        "{name}: {} t[{k}] trajectory {j}: error {err} above E_wc {}",
                        ob.name,
                        pt.e_wc
                    );
                    if err > pt.e_one + SIM_TOL {
                        over += 1;
                    }
                    if p == 0.5 && pt.e_one > 0.0 && k > 0 {
                        m.ratio = m.ratio.max(err / pt.e_one);
                    }
                }
                assert!(
                    over < allowed,
                    "{name}: {} t[{k}] p = {p}: {over} of {r} trajectories above E_1 = {} \
                     (allowed below {allowed})",
                    ob.name,
                    pt.e_one
                );
            }
        }
        if p == 0.05 {
            m.light_cone = b.statement_counts();
            m.e_one_last.0 = b
                .observables
                .iter()
                .map(|o| o.points.last().map_or(0.0, |p| p.e_one))
                .fold(0.0, f64::max);
            // The same record with every source static: windows may only lower E_1.
            let mut plain = s.noise.clone();
            for src in &mut plain.sources {
                src.correlation_time = None;
            }
            let plain = plain.expand(&sim.run.lattice, sim.run.time_unit).unwrap();
            let b0 = evaluate_run(&sim.run, &plain, 1.0 - p, Simultaneity::Pointwise).unwrap();
            for (o, o0) in b.observables.iter().zip(&b0.observables) {
                for (x, x0) in o.points.iter().zip(&o0.points) {
                    assert!(
                        x.e_one <= x0.e_one * (1.0 + 1e-12),
                        "{name}: windows raised E_1"
                    );
                    assert!(
                        x.e_avg <= x0.e_avg * (1.0 + 1e-12),
                        "{name}: windows raised E_avg"
                    );
                }
            }
            m.e_one_last.1 = b0
                .observables
                .iter()
                .map(|o| o.points.last().map_or(0.0, |p| p.e_one))
                .fold(0.0, f64::max);
        }
    }
    println!(
        "{name}: largest error/E_1(0.5) {:.3}; light-cone points {}/{}; E_1(0.05) at t_max \
         {:.4} (static {:.4})",
        m.ratio, m.light_cone.0, m.light_cone.1, m.e_one_last.0, m.e_one_last.1
    );
    m
}

fn chain(n: usize) -> Value {
    json!({"geometry": "chain", "shape": [n], "boundary": "open"})
}

#[test]
fn chain6_uniform_and_two_point_with_a_hundred_windows() {
    let v = scenario(
        "invented-windows-chain6",
        chain(6),
        json!({"J": 1.0, "anisotropy": 0.5, "hx": 0.4, "hz": [0.3, -0.2, 0.1, 0.0, -0.3, 0.2]}),
        json!("neel"),
        json!([
            {"name": "Z_2", "pauli": "Z", "sites": [2]},
            {"name": "XY_2_3", "pauli": "XY", "sites": [2, 3]},
            {"name": "stag", "pauli": "Z", "over": "each_site", "weights": "staggered_mean"}
        ]),
        "every_realization",
        json!([
            source(
                "detuning",
                "each_site",
                "Z",
                0.15,
                json!({"family": "uniform"})
            ),
            source(
                "bond jitter",
                "each_bond",
                "ZZ",
                0.08,
                json!({"family": "two_point"})
            ),
        ]),
        600,
        10,
    );
    let m = check(
        "chain6 τ = t_max/100",
        &windowed(v, &[Some(T_MAX / 100.0), Some(T_MAX / 100.0)]),
    );
    // Fast noise cancels in time: the certified E_1 at the last time is well below the static
    // one (measured 0.33 against 2, the range, where the static bound is vacuous).
    assert!(m.e_one_last.0 < 0.5 * m.e_one_last.1);
}

#[test]
fn chain8_two_point_sites_with_ten_windows() {
    let v = scenario(
        "invented-windows-chain8",
        chain(8),
        json!({"J": 1.0, "anisotropy": 1.0, "hx": 0.3, "hz": 0.0}),
        json!("neel"),
        json!([
            {"name": "Z_3", "pauli": "Z", "sites": [3]},
            {"name": "ZZ_3_4", "pauli": "ZZ", "sites": [3, 4]}
        ]),
        "every_realization",
        json!([source(
            "detuning",
            "each_site",
            "Z",
            0.06,
            json!({"family": "two_point"})
        )]),
        500,
        10,
    );
    check("chain8 τ = t_max/10", &windowed(v, &[Some(T_MAX / 10.0)]));
}

#[test]
fn chain10_uniform_bonds_and_static_sites() {
    let v = scenario(
        "invented-windows-chain10",
        chain(10),
        json!({"J": 1.0, "anisotropy": 0.0, "hx": 0.2, "hz": 0.1}),
        json!("0"),
        json!([
            {"name": "Z_5", "pauli": "Z", "sites": [5]},
            {"name": "mag", "pauli": "Z", "over": "each_site", "weights": "mean"}
        ]),
        "every_realization",
        json!([
            source(
                "exchange",
                "each_bond",
                "XX+YY",
                0.01,
                json!({"family": "uniform"})
            ),
            source(
                "detuning",
                "each_site",
                "Z",
                0.02,
                json!({"family": "uniform"})
            ),
        ]),
        400,
        10,
    );
    // τ = t_max/3 on the bonds; the sites' τ = t_max is one window: static.
    check(
        "chain10 τ = t_max/3 and t_max",
        &windowed(v, &[Some(T_MAX / 3.0), Some(T_MAX)]),
    );
}

#[test]
fn one_windowed_source_on_the_observed_site_nearly_attains_the_bound() {
    // H acts away from site 0 only through the bond (0, 1), which is weak; a two-point Z
    // source on site 0 from |+⟩ rotates X_0 by a phase 2δ Σ_w g_w ℓ_w: the bound's
    // fluctuation term is then close to the spread of the phase.
    let v = scenario(
        "invented-windows-tight",
        chain(6),
        json!({"J": [0.01, 1.0, 1.0, 1.0, 1.0], "anisotropy": 0.0, "hx": 0.0, "hz": 0.0}),
        json!("+"),
        json!([{"name": "X_0", "pauli": "X", "sites": [0]}]),
        "every_realization",
        json!([{"name": "detuning", "acts_on": {"sites": [[0]]}, "operator": "Z",
                 "amplitude": 0.4, "distribution": {"family": "two_point"},
                 "mean_offset": 0.0, "mean_offset_uncertainty": 0.0}]),
        600,
        10,
    );
    let m = check("tight τ = t_max/20", &windowed(v, &[Some(T_MAX / 20.0)]));
    assert!(
        m.ratio > 0.3,
        "the bound should be nearly attained here: largest error/E_1 = {}",
        m.ratio
    );
}

// ---------------------------------------------------------------------------------------
// The binary on the bundled example chain12 (invented scenario, `example_runs/`).

/// Certifies chain12 with `noise` (a record as JSON) and returns the certificate's body.
fn certify_chain12(noise: &Value, extra: &[&str]) -> Value {
    let dir = crate::util::scratch();
    let run = dir.path().join("run.h5");
    std::fs::copy(
        crate::util::repo().join("example_runs/chain12/run.h5"),
        &run,
    )
    .unwrap();
    let record = dir.path().join("noise.json");
    std::fs::write(&record, serde_json::to_string_pretty(noise).unwrap()).unwrap();
    let cert = dir.path().join("c.json");
    crate::util::quassay()
        .arg("certify")
        .arg(&run)
        .arg("--noise")
        .arg(&record)
        .arg("-o")
        .arg(&cert)
        .args(extra)
        .assert()
        .success();
    let v: Value = serde_json::from_str(&std::fs::read_to_string(&cert).unwrap()).unwrap();
    // Every certificate matches schemas/certificate.schema.json (jsonschema, draft 2020-12).
    let errors: Vec<String> = crate::util::certificate_validator()
        .iter_errors(&v)
        .map(|e| format!("{} at {}", e, e.instance_path))
        .collect();
    assert!(errors.is_empty(), "schema: {errors:?}");
    v["body"].clone()
}

fn chain12_record() -> Value {
    let text = std::fs::read_to_string(crate::util::repo().join("example_runs/chain12/noise.json"))
        .unwrap();
    serde_json::from_str(&text).unwrap()
}

/// τ at least the last time (1 us) is one window: the body equals the static one except for
/// the members of format 1.4 and the record's own digest and size.
#[test]
fn a_correlation_time_beyond_the_last_time_changes_nothing_but_the_new_members() {
    let plain = chain12_record();
    let mut long = plain.clone();
    long["format_version"] = json!(3);
    long["sources"][0]["correlation_time"] = json!({"value": 1000.0, "unit": "ns"});
    for share in ["0", "0.5"] {
        let a = certify_chain12(&plain, &["--data-share", share]);
        let mut b = certify_chain12(&long, &["--data-share", share]);
        assert_eq!(b["format_minor"], json!(4));
        let tm = &b["noise"]["sources"][0]["time_model"];
        assert_eq!(tm["kind"], "windows");
        assert_eq!(tm["correlation_time"]["value"].as_f64(), Some(1000.0));
        assert_eq!(tm["correlation_time"]["unit"], "ns");
        assert_eq!(tm["correlation_time_run_unit"].as_f64(), Some(1.0));
        // Remove what format 1.4 adds or changes; the rest must be equal, number for number.
        let m = b.as_object_mut().unwrap();
        match a.get("format_minor") {
            Some(x) => {
                m.insert("format_minor".into(), x.clone());
            }
            None => {
                m.remove("format_minor");
            }
        }
        for key in ["assumptions", "not_covered"] {
            m.insert(key.into(), a[key].clone());
        }
        b["noise"]["sources"][0]
            .as_object_mut()
            .unwrap()
            .remove("time_model");
        b["noise"].as_object_mut().unwrap().remove("format_version");
        for o in b["observables"].as_array_mut().unwrap() {
            let o = o.as_object_mut().unwrap();
            // One window: the static term is the term itself.
            assert_eq!(o["fluctuation_static"], o["fluctuation"]);
            o.remove("fluctuation_static");
        }
        b["claim"].as_object_mut().unwrap().remove("time_model");
        b["inputs"]["noise_record"] = a["inputs"]["noise_record"].clone();
        assert_eq!(a, b, "data share {share}");
    }
}

/// Bad correlation times exit 1 and name the JSON pointer.
#[test]
fn bad_correlation_times_exit_1_with_the_pointer() {
    let dir = crate::util::scratch();
    let run = dir.path().join("run.h5");
    std::fs::copy(
        crate::util::repo().join("example_runs/chain12/run.h5"),
        &run,
    )
    .unwrap();
    let mut cases = Vec::new();
    let mut v = chain12_record();
    v["sources"][0]["correlation_time"] = json!({"value": 2.0, "unit": "ns"});
    cases.push((v.clone(), "/sources/0/correlation_time", "format version 3"));
    v["format_version"] = json!(3);
    v["sources"][0]["correlation_time"] = json!({"value": 0.0, "unit": "ns"});
    cases.push((
        v.clone(),
        "/sources/0/correlation_time/value",
        "must be > 0",
    ));
    v["sources"][0]["correlation_time"] = json!({"value": -1.0, "unit": "ns"});
    cases.push((
        v.clone(),
        "/sources/0/correlation_time/value",
        "must be > 0",
    ));
    v["sources"][0]["correlation_time"] = json!({"value": 2.0});
    cases.push((
        v.clone(),
        "/sources/0/correlation_time",
        "`unit` is missing",
    ));
    for (i, (record, pointer, says)) in cases.into_iter().enumerate() {
        let path = dir.path().join(format!("bad{i}.json"));
        std::fs::write(&path, serde_json::to_string(&record).unwrap()).unwrap();
        let out = crate::util::quassay()
            .arg("certify")
            .arg(&run)
            .arg("--noise")
            .arg(&path)
            .arg("-o")
            .arg(dir.path().join("c.json"))
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(1), "case {i}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(
            err.contains(pointer) && err.contains(says),
            "case {i}: {err}"
        );
        assert!(!dir.path().join("c.json").exists());
    }
}

// ---------------------------------------------------------------------------------------
// The simulator's windows.

fn one_spin(tau: Option<f64>) -> Value {
    // Two uncoupled sites from |+⟩; a two-point Z source on site 0 only. X_0 is then
    // cos(2δ Σ_w g_w ℓ_w) exactly (closed form).
    let v = scenario(
        "invented-windows-one-spin",
        chain(2),
        json!({"J": 0.0, "anisotropy": 0.0, "hx": 0.0, "hz": 0.0}),
        json!("+"),
        json!([{"name": "X_0", "pauli": "X", "sites": [0]}]),
        "every_realization",
        json!([{"name": "detuning", "acts_on": {"sites": [[0]]}, "operator": "Z",
                 "amplitude": 0.7, "distribution": {"family": "two_point"},
                 "mean_offset": 0.0, "mean_offset_uncertainty": 0.0}]),
        200,
        10,
    );
    windowed(v, &[tau])
}

/// Against the closed form: with τ = t_max/5 the exact value at t_k = kτ is
/// `cos(2δτ m)` for some `m ∈ {−k, −k+2, …, k}`, and more than two values occur at the last
/// time (static noise gives only `cos(2δt)`); with τ beyond the last time the simulation is
/// bit for bit the static one.
#[test]
fn the_simulator_redraws_at_the_window_edges() {
    let delta = 0.7;
    let tau = T_MAX / 5.0;
    let s = scenario_from_value(&one_spin(Some(tau))).unwrap();
    let sim = simulate(&s, s.seed);
    let exact = &sim.truth.observables[0].exact;
    let times = &sim.run.times;
    for (k, &t) in times.iter().enumerate() {
        let n = (t / tau).round() as i64;
        for j in 0..s.realizations {
            let x = exact[[j, k]];
            let near = (-n..=n)
                .step_by(2)
                .any(|m| (x - (2.0 * delta * tau * m as f64).cos()).abs() < SIM_TOL);
            assert!(near, "t = {t}: {x} is no cos(2δτm)");
        }
    }
    let last = times.len() - 1;
    let mut values: Vec<i64> = (0..s.realizations)
        .map(|j| (exact[[j, last]] * 1e6).round() as i64)
        .collect();
    values.sort_unstable();
    values.dedup();
    assert!(values.len() > 2, "only {values:?} at the last time");

    let stat = scenario_from_value(&one_spin(None)).unwrap();
    let long = scenario_from_value(&one_spin(Some(10.0 * T_MAX))).unwrap();
    let a = simulate(&stat, stat.seed);
    let b = simulate(&long, long.seed);
    assert_eq!(
        a.truth.observables[0].exact, b.truth.observables[0].exact,
        "τ beyond the last time must simulate exactly the static noise"
    );
}

/// τ = 50 ns on chain12 (t_max = 1 us, 20 windows): the certificate verifies, its E_avg at the
/// last time is well below the static one (measured 0.026 against 0.122), the static
/// fluctuation column is above the windowed one, and the report draws both.
#[test]
fn a_short_correlation_time_certifies_verifies_and_is_reported_against_static_noise() {
    let dir = crate::util::scratch();
    let run = dir.path().join("run.h5");
    std::fs::copy(
        crate::util::repo().join("example_runs/chain12/run.h5"),
        &run,
    )
    .unwrap();
    let mut v = chain12_record();
    v["format_version"] = json!(3);
    v["sources"][0]["correlation_time"] = json!({"value": 50, "unit": "ns"});
    let record = dir.path().join("noise.json");
    std::fs::write(&record, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    let cert = dir.path().join("c.json");
    let html = dir.path().join("r.html");
    let out = crate::util::quassay()
        .arg("certify")
        .arg(&run)
        .arg("--noise")
        .arg(&record)
        .arg("-o")
        .arg(&cert)
        .arg("--report")
        .arg(&html)
        .output()
        .unwrap();
    assert!(out.status.success());
    let summary = String::from_utf8_lossy(&out.stdout);
    assert!(summary.contains("noise drawn again during each evolution: every 0.05 us"));
    crate::util::quassay()
        .arg("verify")
        .arg(&cert)
        .assert()
        .success();
    let c: Value = serde_json::from_str(&std::fs::read_to_string(&cert).unwrap()).unwrap();
    let windowed = &c["body"];
    let fixed = certify_chain12(&chain12_record(), &[]);
    for (o, o0) in windowed["observables"]
        .as_array()
        .unwrap()
        .iter()
        .zip(fixed["observables"].as_array().unwrap())
    {
        let last = |x: &Value, k: &str| x[k].as_array().unwrap().last().unwrap().as_f64().unwrap();
        assert!(last(o, "e_avg") < 0.5 * last(o0, "e_avg"), "{}", o["name"]);
        assert!(last(o, "fluctuation_static") > 2.0 * last(o, "fluctuation"));
    }
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.contains("fluctuation term, static noise"));
    assert!(page.contains("declares correlation times"));
}

/// The fidelity bound of docs/method.md §4 with windows, on the one-spin scenario whose
/// fidelity is known in closed form: from |+⟩|+⟩ with H = 0 and the noise `δ g(s) Z_0`, the
/// state picks up the phase `φ = δ Σ_w g_w ℓ_w` on site 0, so `F = cos² φ = (1 + ⟨X_0⟩)/2`
/// with `⟨X_0⟩ = cos 2φ` from the exact simulation. Over 1000 trajectories with τ = t_max/5,
/// the number below `F_low(p)` stays under the binomial allowance (level 0.001), p = 0.5, 0.2,
/// 0.05, and `F` is never below the worst-case bound.
#[test]
fn the_fidelity_bound_holds_for_windowed_noise_on_one_spin() {
    use quassay::bounds::fidelity::fidelity_bound;
    use quassay::bounds::global::SourceData;
    let mut v = one_spin(Some(T_MAX / 5.0));
    v["realizations"] = json!(1000);
    let s = scenario_from_value(&v).unwrap();
    let sim = simulate(&s, s.seed);
    let model = s.noise.expand(&sim.run.lattice, sim.run.time_unit).unwrap();
    let sources: Vec<SourceData> = model
        .instances
        .iter()
        .map(SourceData::from_instance)
        .collect();
    let exact = &sim.truth.observables[0].exact;
    let mut worst_ratio = 0.0f64;
    for (k, &t) in sim.run.times.iter().enumerate().skip(1) {
        let wc = fidelity_bound(&sources, t, 0.5);
        for &p in &P_VALUES {
            let b = fidelity_bound(&sources, t, p);
            let allowed = binomial_critical(s.realizations as u64, p, LEVEL);
            let mut below = 0u64;
            for j in 0..s.realizations {
                let f = 0.5 * (1.0 + exact[[j, k]]);
                if f < b.f_low - SIM_TOL {
                    below += 1;
                }
                if !b.vacuous && p == 0.5 {
                    worst_ratio = worst_ratio.max((1.0 - f) / (1.0 - b.f_low));
                }
                // Worst case: D_wc = t Σ δ (b + m), F ≥ (1 − D_wc²/2)² when D_wc ≤ √2.
                if wc.d_wc <= std::f64::consts::SQRT_2 {
                    let f_wc = (1.0 - 0.5 * wc.d_wc * wc.d_wc).powi(2);
                    assert!(f >= f_wc - SIM_TOL, "t = {t}: F = {f} below {f_wc}");
                }
            }
            assert!(
                below < allowed,
                "t = {t}, p = {p}: {below} trajectories below F_low = {} (allowed {allowed})",
                b.f_low
            );
        }
    }
    println!("one spin, τ = t_max/5: largest (1 − F)/(1 − F_low(0.5)) = {worst_ratio:.3}");
    assert!(worst_ratio > 0.0);
}

/// The scenario reader refuses more than 10⁴ windows per source, and windows beside device
/// sections, naming the correlation time.
#[test]
fn the_scenario_reader_limits_the_windows() {
    let v = one_spin(Some(T_MAX / 1e5));
    let p = scenario_from_value(&v).unwrap_err();
    let text = format!("{p:?}");
    assert!(
        text.contains("/noise/sources/0/correlation_time") && text.contains("windows"),
        "{text}"
    );
    // A true-noise source of its own is named where the scenario writes it.
    let mut v = one_spin(Some(T_MAX / 5.0));
    let mut extra = v["noise"]["sources"][0].clone();
    extra["name"] = json!("fast extra");
    extra["correlation_time"] = json!({"value": T_MAX / 1e5, "unit": "us"});
    v["true_noise"] = json!({"extra_sources": [extra]});
    let text = format!("{:?}", scenario_from_value(&v).unwrap_err());
    assert!(
        text.contains("/true_noise/extra_sources/0/correlation_time")
            && !text.contains("/noise/sources/0/correlation_time"),
        "{text}"
    );
    let mut v = one_spin(Some(T_MAX / 5.0));
    v["noise"]["preparation"] = json!([{"acts_on": "each_site", "trace_distance": 0.01, "trace_distance_uncertainty": 0.0}]);
    let text = format!("{:?}", scenario_from_value(&v).unwrap_err());
    assert!(
        text.contains("/noise/sources/0/correlation_time") && text.contains("device sections"),
        "{text}"
    );
}
