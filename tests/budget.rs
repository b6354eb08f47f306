//! Integration tests for `quassay budget` (docs/budget.md).
//!
//! * Against `certify`: the largest scale factor λ that `budget` returns for the bundled
//!   invented example `example_runs/chain12` is written into a noise record (amplitude × λ),
//!   the example's run is certified with it, and the certified global half-width
//!   `e_avg_global + e_shot` at the planned time equals the target within the bisection
//!   tolerance. The two programs share the §3 formulas but not the search, the expansion of
//!   the record (done by certify from the edited file) or the confidence split.
//! * The √M law: the gain of the single-evolution answer over the worst case, fitted on a
//!   log-log scale over M = 10 … 10^4 sources, has exponent 1/2 within 0.05 (docs/method.md §3: the
//!   fluctuation grows like √M, the worst case like M).

use serde_json::Value;

use crate::util::{quassay, repo, scratch};

fn budget(args: &[&str]) -> Value {
    budget_with("example_runs/chain12/noise.json", args)
}

/// `quassay budget --noise RECORD --time-unit us --spectrum -1,1 --json ARGS`, which must
/// succeed, with a record of the repository.
fn budget_with(record: &str, args: &[&str]) -> Value {
    let noise = repo().join(record);
    let out = quassay()
        .arg("budget")
        .arg("--noise")
        .arg(&noise)
        .args(["--time-unit", "us", "--spectrum", "-1,1", "--json"])
        .args(args)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn the_planned_scale_gives_the_target_error_when_certified() {
    // 21 times x 3 observables = 63 points, 40 realizations of 1000 shots (the example).
    let target = 0.2;
    let j = budget(&[
        "--lattice",
        "chain:12",
        "--target",
        "0.2",
        "--time",
        "1",
        "--points",
        "63",
        "--realizations",
        "40",
        "--shots",
        "1000",
    ]);
    let a = &j["scale"]["averaged"]["stochastic"];
    assert_eq!(a["status"], "found");
    let lambda = a["value"].as_f64().unwrap();
    assert!(lambda > 1.0, "λ = {lambda}");
    let wc = j["scale"]["averaged"]["worst_case"]["value"]
        .as_f64()
        .unwrap();
    assert!(wc < lambda);

    let dir = scratch();
    let src = repo().join("example_runs/chain12");
    std::fs::copy(src.join("run.h5"), dir.path().join("run.h5")).unwrap();
    let mut rec: Value =
        serde_json::from_str(&std::fs::read_to_string(src.join("noise.json")).unwrap()).unwrap();
    let amp = rec["sources"][0]["amplitude"].as_f64().unwrap();
    rec["sources"][0]["amplitude"] = serde_json::json!(amp * lambda);
    let noise = dir.path().join("noise.json");
    std::fs::write(&noise, serde_json::to_string(&rec).unwrap()).unwrap();
    let out = quassay()
        .arg("certify")
        .arg(dir.path().join("run.h5"))
        .arg("--noise")
        .arg(&noise)
        // budget plans the model statement alone, at the whole confidence level.
        .args(["--data-share", "0"])
        .output()
        .unwrap();
    // 0: consistent; 3: the record was judged inconsistent, the certificate is still written.
    assert!(matches!(out.status.code(), Some(0 | 3)));
    let cert: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("run.cert.json")).unwrap())
            .unwrap();
    let body = &cert["body"];
    let k = body["run"]["times"].as_array().unwrap().len() - 1; // t = 1 us
    assert_eq!(body["run"]["times"][k].as_f64().unwrap(), 1.0);
    for o in body["observables"].as_array().unwrap() {
        let hw = o["e_avg_global"][k].as_f64().unwrap() + o["e_shot"][k].as_f64().unwrap();
        // Bisection tolerance 1e-10 relative in λ; the error is about linear in λ.
        assert!(
            (hw - target).abs() < 1e-8 * target,
            "{}: certified {hw} vs target {target}",
            o["name"]
        );
    }
}

#[test]
fn the_gain_of_a_single_evolution_grows_like_the_square_root_of_the_sources() {
    let j = budget(&[
        "--lattice",
        "chain:10",
        "--target",
        "0.05",
        "--time",
        "1",
        "--sizes",
        "10,31,100,316,1000,3162,10000",
    ]);
    let rows = j["table"].as_array().unwrap();
    let pts: Vec<(f64, f64)> = rows
        .iter()
        .map(|r| {
            (
                r["sources"].as_f64().unwrap(),
                r["single"]["gain"].as_f64().unwrap(),
            )
        })
        .collect();
    assert_eq!(pts.len(), 7);
    // Least-squares slope of ln(gain) against ln(M), computed here.
    let n = pts.len() as f64;
    let mx = pts.iter().map(|p| p.0.ln()).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1.ln()).sum::<f64>() / n;
    let sxy: f64 = pts.iter().map(|p| (p.0.ln() - mx) * (p.1.ln() - my)).sum();
    let sxx: f64 = pts.iter().map(|p| (p.0.ln() - mx).powi(2)).sum();
    let slope = sxy / sxx;
    assert!((slope - 0.5).abs() < 0.05, "slope {slope}: {pts:?}");
    let reported = j["gain_exponent"]["single"].as_f64().unwrap();
    assert!((reported - slope).abs() < 1e-9);
    // Every gain is above 1 (the stochastic bound is never worse than the worst case).
    assert!(pts.iter().all(|p| p.1 >= 1.0));
}

#[test]
fn longest_time_and_largest_system_are_edges_of_the_target() {
    let j = budget(&[
        "--lattice",
        "chain:12",
        "--target",
        "0.1",
        "--time",
        "1",
        "--realizations",
        "40",
        "--shots",
        "1000",
        "--sizes",
        "10",
    ]);
    // Global bounds depend on δ·t only, so at t = 1 the longest time equals the scale factor.
    let s = j["scale"]["averaged"]["stochastic"]["value"]
        .as_f64()
        .unwrap();
    let t = j["time_limit"]["averaged"]["stochastic"]["value"]
        .as_f64()
        .unwrap();
    assert!((s - t).abs() < 1e-8 * s, "{s} {t}");
    // The 12-site example at t = 1 exceeds 0.1 (certify: about 0.14), so the largest chain is
    // shorter than 12, and the worst case allows fewer sites than the stochastic bound.
    let n = j["size"]["averaged"]["stochastic"]["value"]
        .as_f64()
        .unwrap();
    let n_wc = j["size"]["averaged"]["worst_case"]["value"]
        .as_f64()
        .unwrap();
    assert!((1.0..12.0).contains(&n) && n_wc <= n, "{n} {n_wc}");
}

#[test]
fn impossible_targets_and_bad_options() {
    // Below the shot term: no scale works.
    let j = budget(&[
        "--lattice",
        "chain:12",
        "--target",
        "0.001",
        "--time",
        "1",
        "--realizations",
        "1",
        "--shots",
        "100",
        "--sizes",
        "10",
    ]);
    assert_eq!(j["scale"]["averaged"]["stochastic"]["status"], "infeasible");
    let noise = repo().join("example_runs/chain12/noise.json");
    for bad in [
        vec!["--lattice", "ring:5"],
        vec!["--lattice", "square:3x"],
        vec!["--lattice", "chain:12", "--spectrum", "1,-1"],
        vec!["--lattice", "chain:12", "--target", "0"],
        vec!["--lattice", "chain:12", "--time-unit", "hours"],
        vec!["--lattice", "chain:12", "--confidence", "1"],
    ] {
        let mut base = vec![
            "--time-unit",
            "us",
            "--spectrum",
            "-1,1",
            "--target",
            "0.1",
            "--time",
            "1",
        ];
        // A later repetition of an option would be refused by clap; replace instead.
        for pair in bad.chunks(2) {
            if let Some(i) = base.iter().position(|a| *a == pair[0]) {
                base[i + 1] = pair[1];
            } else {
                base.extend_from_slice(pair);
            }
        }
        quassay()
            .arg("budget")
            .arg("--noise")
            .arg(&noise)
            .args(&base)
            .assert()
            .code(2);
    }
}

/// Regression: a record with a source on every bond (the bundled 3 × 4 array's coupling
/// errors) made the search over system sizes start at a 1 × 1 array, which has no bonds, and
/// the whole command failed with "the run's lattice (square with 1 sites) has no bonds".
#[test]
fn a_record_with_bond_sources_plans_a_square_lattice() {
    let v = budget_with(
        "example_runs/square3x4/noise.json",
        &[
            "--lattice",
            "square:10x10",
            "--target",
            "0.1",
            "--time",
            "1",
        ],
    );
    // The size search ran (it needs the record on other sizes, down to a side of 2).
    let size = &v["size"];
    assert!(size.is_object() || size.is_array(), "{size}");
    assert_ne!(size["status"], "not_available", "{size}");
}

/// Device errors (docs/method.md §7) in the answers. With no Hamiltonian noise (amplitude 0)
/// and no shot term, the error is `E_dev(t) = s_O (t ΣΓ + Σε + 1 − Π(1 − p))`, linear in t and
/// in ΣΓ, so (b) and (e) have closed forms, computed here by hand from the record's numbers:
/// 10 sites, dephasing 0.01/us each (constant 1), trace distance 0.001, flips max(0.002, 0.001).
/// A site listed explicitly fixes the system, so (c) is then not available.
#[test]
fn device_errors_enter_every_answer_and_the_largest_rate_is_the_closed_form() {
    let dir = scratch();
    let record = |listed: bool| {
        let text =
            std::fs::read_to_string(repo().join("tests/reference/noise/valid/chain-detuning.json"))
                .unwrap();
        let mut v: Value = serde_json::from_str(&text).unwrap();
        v["format_version"] = serde_json::json!(2);
        v["sources"][0]["amplitude"] = serde_json::json!(0.0);
        v["incoherent"] = serde_json::json!([{"name": "dephasing", "acts_on": "each_site",
            "jump": "dephasing", "rate": 0.01, "rate_uncertainty": 0.0, "rate_unit": "1/us"}]);
        v["preparation"] = serde_json::json!([{"acts_on": "each_site",
            "trace_distance": 0.001, "trace_distance_uncertainty": 0.0}]);
        v["readout"] = serde_json::json!({"applies_to": "all", "errors": [{"acts_on":
            if listed { serde_json::json!({"sites": [0, 1]}) } else { serde_json::json!("each_site") },
            "flip_0_to_1": 0.002, "flip_1_to_0": 0.001, "flip_uncertainty": 0.0}]});
        let path = dir.path().join(format!("noise-{listed}.json"));
        std::fs::write(&path, serde_json::to_string(&v).unwrap()).unwrap();
        path
    };
    let (target, t, s_o) = (0.3, 2.0, 2.0);
    let args = [
        "--lattice",
        "chain:10",
        "--target",
        "0.3",
        "--time",
        "2",
        "--sizes",
        "10,20",
    ];
    let v = budget_with(record(false).to_str().unwrap(), &args);
    let e_prep = s_o * 10.0 * 0.001;
    let e_meas = s_o * (1.0 - 0.998f64.powi(10));
    let dev = &v["device_errors"];
    let close = |a: &Value, b: f64| {
        let a = a.as_f64().unwrap();
        assert!((a / b - 1.0).abs() < 1e-9, "{a} vs {b}");
    };
    close(&dev["e_preparation"], e_prep);
    close(&dev["e_readout"], e_meas);
    close(&dev["e_incoherent"], s_o * t * 10.0 * 0.01);
    let room = target - e_prep - e_meas;
    // (e): the largest ΣΓ; (b): the longest time at the recorded ΣΓ = 0.1.
    for w in ["averaged", "single"] {
        close(
            &dev["largest_rate_sum"][w]["stochastic"]["value"],
            room / (s_o * t),
        );
        close(
            &dev["largest_rate_sum"][w]["worst_case"]["value"],
            room / (s_o * t),
        );
        close(
            &v["time_limit"][w]["stochastic"]["value"],
            room / (s_o * 0.1),
        );
        // (a): no scale on the (zero) amplitudes helps: E_inc alone exceeds the target at T.
        assert_eq!(v["scale"][w]["stochastic"]["status"], "infeasible");
    }
    // (c) counts the device errors of every size: with ΣΓ = 0.01 n the error at T reaches the
    // target near n = room'/(s_O t 0.01), room' shrinking as n grows; the answer is an edge.
    let n = v["size"]["averaged"]["stochastic"]["value"]
        .as_f64()
        .unwrap() as i32;
    let e = |n: i32| s_o * (t * 0.01 * n as f64 + 0.001 * n as f64 + 1.0 - 0.998f64.powi(n));
    assert!(e(n) <= target && e(n + 1) > target, "n = {n}");
    let v = budget_with(record(true).to_str().unwrap(), &args);
    assert_eq!(v["size"]["status"], "not_available");
    assert!(v["size"]["reason"].as_str().unwrap().contains("readout"));
}

/// `--support`: the light-cone answers agree with `certify` on the same inputs. The example
/// `chain12` (12 sites, bond norms ≤ 2 MHz, 21 times × 3 observables, 40 realizations of 1000
/// shots) certified with the model statement alone (`--data-share 0`) gives, for `Z_6` at the
/// last time, the same E_avg, E_shot and E_1 as budget planning that point (to 1e-8; in fact
/// bit for bit, since both run the same evaluator). Then the planned scale, written into the
/// record and certified, reaches the target at that time.
#[test]
fn the_light_cone_answers_agree_with_certify_on_the_same_inputs() {
    let dir = scratch();
    let example = repo().join("example_runs/chain12");
    std::fs::copy(example.join("run.h5"), dir.path().join("run.h5")).unwrap();
    let text = std::fs::read_to_string(example.join("noise.json")).unwrap();
    std::fs::write(dir.path().join("noise.json"), &text).unwrap();
    let certify = |name: &str| {
        quassay()
            .current_dir(dir.path())
            .args([
                "certify",
                "run.h5",
                "--noise",
                "noise.json",
                "--data-share",
                "0",
            ])
            .args(["-o", name])
            .assert()
            .code(0);
        let cert = crate::util::certified(&dir.path().join(name));
        let o = crate::util::observable(&cert, "Z_6").clone();
        let last = |c: &str| *crate::util::numbers(&o[c]).last().unwrap();
        (last("e_avg"), last("e_shot"), last("e_one"))
    };
    let target = 0.3;
    let b = budget(&[
        "--lattice",
        "chain:12",
        "--target",
        "0.3",
        "--time",
        "1",
        "--points",
        "63",
        "--realizations",
        "40",
        "--shots",
        "1000",
        "--support",
        "6",
        "--bond-norm",
        "2",
        "--energy-unit",
        "MHz",
    ]);
    let (e_avg, e_shot, e_one) = certify("recorded.cert.json");
    let at = &b["local"]["at_point"];
    for (ours, theirs) in [
        (at["e_avg"].as_f64().unwrap(), e_avg),
        (at["e_shot"].as_f64().unwrap(), e_shot),
        (at["e_one"].as_f64().unwrap(), e_one),
    ] {
        assert!((ours - theirs).abs() <= 1e-8, "{ours} vs {theirs}");
    }
    assert_eq!(b["local"]["light_cone_used_at_point"], true);
    // The planned scale λ: certified with amplitudes × λ, E_avg + E_shot meets the target.
    let lambda = b["local"]["scale"]["averaged"]["value"].as_f64().unwrap();
    let mut record: Value = serde_json::from_str(&text).unwrap();
    for s in record["sources"].as_array_mut().unwrap() {
        s["amplitude"] = serde_json::json!(s["amplitude"].as_f64().unwrap() * lambda);
    }
    std::fs::write(dir.path().join("noise.json"), record.to_string()).unwrap();
    let (e_avg, e_shot, _) = certify("scaled.cert.json");
    assert!(
        (e_avg + e_shot - target).abs() <= 1e-6 * target,
        "{} vs {target}",
        e_avg + e_shot
    );
    // Without --bond-norm: a usage error.
    quassay()
        .args(["budget", "--noise", "noise.json", "--lattice", "chain:12"])
        .args(["--time-unit", "us", "--spectrum", "-1,1", "--target", "0.3"])
        .args(["--time", "1", "--support", "6"])
        .current_dir(dir.path())
        .assert()
        .code(2);
}
