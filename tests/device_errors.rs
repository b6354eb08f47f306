//! The device-error bounds (docs/method.md §7) against exact open-system evolutions, and their
//! locality.
//!
//! Reference: `tests/reference/device/cases.json`, written by `make_fixtures.py` beside it with
//! QuTiP's `mesolve` (PyPI `qutip`): chains of 4, 5 and 6 sites and a 2 × 3 array (invented
//! XXZ systems with random fields), each with Lindblad jumps at stated rates (dephasing,
//! decay, excitation, depolarising) and per-site preparation flips. For every observable and
//! time the test checks `|open − closed| ≤ E_inc` and `|prepared − closed| ≤ E_prep`, in the
//! global and the light-cone form, that the project's own state-vector evolution
//! (`src/simulate`) reproduces the closed values to 1e-8, and that its density-matrix evolution
//! (`src/simulate/lindblad.rs`, which `simulate` uses to rehearse device errors) reproduces the
//! open and the prepared values to 1e-8.

use std::collections::BTreeSet;

use num_complex::Complex64;
use serde_json::Value;

use quassay::bounds::device::{DeviceData, DeviceTerms};
use quassay::bounds::light_cone::{site_instances, SiteCone, WalkGraph};
use quassay::model::device::{DeviceModel, Jump};
use quassay::model::{Boundary, Geometry, Lattice};
use quassay::simulate::hamiltonian::{Operator, PauliSum};
use quassay::simulate::lindblad::{evolve_density, Density, Jumps};
use quassay::simulate::pauli::PauliString;
use quassay::simulate::propagate::{evolve, Workspace};

use crate::util::reference;

/// QuTiP's integration tolerance (atol 1e-12, rtol 1e-10 over 16 times) with room to spare.
const QUTIP_TOL: f64 = 1e-8;

fn fixture() -> Value {
    let text = std::fs::read_to_string(reference("device/cases.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn f64s(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn usizes(v: &Value) -> Vec<usize> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_u64().unwrap() as usize)
        .collect()
}

fn lattice_of(case: &Value) -> Lattice {
    let shape = usizes(&case["shape"]);
    let geometry = if shape.len() == 1 {
        Geometry::Chain
    } else {
        Geometry::Square
    };
    let lattice = Lattice::regular(geometry, &shape, Boundary::Open).unwrap();
    // The fixture's bonds are the lattice's (as sets of site pairs).
    let ours: BTreeSet<[usize; 2]> = lattice
        .bonds()
        .iter()
        .map(|&[a, b]| [a.min(b) as usize, a.max(b) as usize])
        .collect();
    let theirs: BTreeSet<[usize; 2]> = case["bonds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| {
            let v = usizes(b);
            [v[0].min(v[1]), v[0].max(v[1])]
        })
        .collect();
    assert_eq!(ours, theirs, "{}", case["name"]);
    lattice
}

/// The centred norm of `J (XX + YY + Δ ZZ)`: its eigenvalues are `JΔ` (twice), `J(2 − Δ)` and
/// `J(−2 − Δ)`, so half the spread is `J (max(Δ, 2 − Δ) + 2 + Δ)/2`.
fn bond_norm(j: f64, delta: f64) -> f64 {
    j * (delta.max(2.0 - delta) + 2.0 + delta) / 2.0
}

/// The device model of a case: per site `Σ γ c` and `ε_i`.
fn device_model(case: &Value, n: usize) -> DeviceModel {
    let mut rates = vec![0.0; n];
    for ch in case["channels"].as_array().unwrap() {
        let jump = Jump::parse(ch["jump"].as_str().unwrap()).unwrap();
        let rate = ch["rate"].as_f64().unwrap();
        for r in rates.iter_mut() {
            *r += rate * jump.constant();
        }
    }
    DeviceModel {
        incoherent: Some(rates),
        preparation: Some(f64s(&case["preparation_eps"])),
        readout: None,
    }
}

fn terms_of(case: &Value, cone: bool) -> Vec<(Value, DeviceTerms)> {
    let lattice = lattice_of(case);
    let n = lattice.n_sites();
    let j = case["coupling"].as_f64().unwrap();
    let delta = case["anisotropy"].as_f64().unwrap();
    let norms = vec![bond_norm(j, delta); lattice.n_bonds()];
    let graph = WalkGraph::new(&lattice, &norms, 1, &[]).unwrap();
    let n_y: Vec<u32> = (0..n).map(|i| graph.bonds_meeting(&[i]) as u32).collect();
    let data = DeviceData::new(&device_model(case, n), &n_y);
    let times = f64s(&case["times"]);
    let sites = site_instances(n);
    case["observables"]
        .as_array()
        .unwrap()
        .iter()
        .map(|o| {
            let mut support = usizes(&o["sites"]);
            support.sort_unstable();
            let c = cone.then(|| SiteCone::new(&graph, &support, &sites, &times).unwrap());
            let t = data.observable("o", 2.0, &support, None, &times, c.as_ref());
            (o.clone(), t)
        })
        .collect()
}

#[test]
fn incoherent_and_preparation_bounds_hold_on_exact_open_evolutions() {
    let fx = fixture();
    let mut checked = 0;
    for case in fx["cases"].as_array().unwrap() {
        let global = terms_of(case, false);
        let local = terms_of(case, true);
        for ((o, g), (_, l)) in global.iter().zip(&local) {
            let closed = f64s(&o["closed"]);
            let open = f64s(&o["open"]);
            let prepared = f64s(&o["prepared"]);
            let (gi, li) = (
                g.incoherent.as_ref().unwrap(),
                l.incoherent.as_ref().unwrap(),
            );
            let (gp, lp) = (
                g.preparation.as_ref().unwrap(),
                l.preparation.as_ref().unwrap(),
            );
            for k in 0..closed.len() {
                let what = format!(
                    "{} {} {:?} at k = {k}",
                    case["name"], o["pauli"], o["sites"]
                );
                let e_inc = (open[k] - closed[k]).abs();
                let e_prep = (prepared[k] - closed[k]).abs();
                assert!(
                    li[k] <= gi[k] && lp[k] <= gp[k],
                    "{what}: cone above global"
                );
                assert!(
                    e_inc <= li[k] + QUTIP_TOL,
                    "{what}: |open − closed| = {e_inc} > {}",
                    li[k]
                );
                assert!(
                    e_prep <= lp[k] + QUTIP_TOL,
                    "{what}: |prepared − closed| = {e_prep} > {}",
                    lp[k]
                );
                checked += 1;
            }
        }
    }
    assert_eq!(checked, 16 * (4 * 4 + 3));
}

/// The light cone matters where it should: at t = 0 the preparation term of a one-site
/// observable is its own site's `s_O ε_i` (every other site is outside the support), and it
/// grows to the global `s_O Σ ε_i` only as the cone covers the chain.
#[test]
fn the_preparation_term_starts_from_the_observables_own_sites() {
    let fx = fixture();
    let case = &fx["cases"][0];
    let eps = f64s(&case["preparation_eps"]);
    let local = terms_of(case, true);
    let (o, t) = &local[0];
    assert_eq!(usizes(&o["sites"]), vec![1]);
    let p = t.preparation.as_ref().unwrap();
    assert!((p[0] - 2.0 * eps[1]).abs() < 1e-15, "{}", p[0]);
    let total: f64 = eps.iter().sum();
    assert!(p[1] < 2.0 * total);
    // The incoherent term at t = 0 is 0.
    assert_eq!(t.incoherent.as_ref().unwrap()[0], 0.0);
}

/// The fixture case's XXZ Hamiltonian with its fields, compiled, and its number of sites.
fn case_operator(case: &Value) -> (Operator, usize) {
    let n = lattice_of(case).n_sites();
    let bonds: Vec<[u32; 2]> = case["bonds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| {
            let v = usizes(b);
            [v[0] as u32, v[1] as u32]
        })
        .collect();
    let j = vec![case["coupling"].as_f64().unwrap(); bonds.len()];
    let h = PauliSum::xxz(
        &bonds,
        &j,
        case["anisotropy"].as_f64().unwrap(),
        &vec![0.0; n],
        &f64s(&case["fields"]),
    );
    (Operator::compile(&h, n), n)
}

/// The project's own evolution (Chebyshev propagator of src/simulate) reproduces QuTiP's
/// closed values to 1e-8: the fixture's systems are the ones the project's conventions describe.
#[test]
fn the_projects_evolution_agrees_with_the_fixture() {
    let fx = fixture();
    for case in fx["cases"].as_array().unwrap() {
        let (op, _) = case_operator(case);
        // The product state, site i being bit i of the basis index.
        let s = std::f64::consts::FRAC_1_SQRT_2;
        let mut psi = vec![Complex64::new(1.0, 0.0)];
        for (i, x) in case["initial_state"].as_array().unwrap().iter().enumerate() {
            let (a0, a1) = match x.as_str().unwrap() {
                "0" => (1.0, 0.0),
                "1" => (0.0, 1.0),
                "+" => (s, s),
                other => panic!("{other}"),
            };
            let mut next = vec![Complex64::new(0.0, 0.0); psi.len() * 2];
            for (b, &amp) in psi.iter().enumerate() {
                next[b] += amp * a0;
                next[b | (1 << i)] += amp * a1;
            }
            psi = next;
        }
        let times = f64s(&case["times"]);
        let observables: Vec<(PauliString, Vec<f64>)> = case["observables"]
            .as_array()
            .unwrap()
            .iter()
            .map(|o| {
                let p =
                    PauliString::from_letters(o["pauli"].as_str().unwrap(), &usizes(&o["sites"]))
                        .unwrap();
                (p, f64s(&o["closed"]))
            })
            .collect();
        let mut work = Workspace::default();
        let mut now = 0.0;
        for (k, &t) in times.iter().enumerate() {
            evolve(&op, &mut psi, t - now, 1e-13, &mut work);
            now = t;
            for (p, closed) in &observables {
                let v = p.expectation(&psi);
                assert!(
                    (v - closed[k]).abs() < QUTIP_TOL,
                    "{} at t = {t}: {v} vs QuTiP {}",
                    case["name"],
                    closed[k]
                );
            }
        }
    }
}

/// `E_inc` of the one-site observable at the middle of an `L`-site chain or `L × L` square
/// lattice (couplings of centred norm 1, one unit rate on every site), at `times`.
fn middle_site_incoherent(geometry: Geometry, shape: &[usize], times: &[f64]) -> Vec<f64> {
    let lattice = Lattice::regular(geometry, shape, Boundary::Open).unwrap();
    let n = lattice.n_sites();
    let norms = vec![1.0; lattice.n_bonds()];
    let graph = WalkGraph::new(&lattice, &norms, 1, &[]).unwrap();
    let n_y: Vec<u32> = (0..n).map(|i| graph.bonds_meeting(&[i]) as u32).collect();
    let model = DeviceModel {
        incoherent: Some(vec![1.0; n]),
        ..Default::default()
    };
    let data = DeviceData::new(&model, &n_y);
    let middle = match shape {
        [l] => l / 2,
        [l, m] => (l / 2) * m + m / 2,
        _ => unreachable!(),
    };
    let cone = SiteCone::new(&graph, &[middle], &site_instances(n), times).unwrap();
    let t = data.observable("o", 2.0, &[middle], None, times, Some(&cone));
    t.incoherent.unwrap()
}

fn log_log_slope(times: &[f64], values: &[f64]) -> f64 {
    let n = times.len() as f64;
    let (xs, ys): (Vec<f64>, Vec<f64>) = times
        .iter()
        .zip(values)
        .map(|(t, v)| (t.ln(), v.ln()))
        .unzip();
    let (mx, my) = (xs.iter().sum::<f64>() / n, ys.iter().sum::<f64>() / n);
    let sxy: f64 = xs.iter().zip(&ys).map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = xs.iter().map(|x| (x - mx) * (x - mx)).sum();
    sxy / sxx
}

/// Locality (docs/method.md §7.2): on a 1000-site chain the incoherent term of the middle
/// site does not depend on the chain's length (equal to 1e-12 on a chain of 2001 sites), and
/// it grows like `t^{d+1}` once the light cone is wide: fitted log-log slopes within 0.15 of 2
/// on the chain and of 3 on a 400 × 400 square lattice (the lattice is wider than the cone at
/// the largest time, whose walk order reaches well inside it).
#[test]
fn the_incoherent_term_of_a_local_observable_is_local() {
    let times: Vec<f64> = (1..=10).map(|k| k as f64 * 2.0).collect();
    let a = middle_site_incoherent(Geometry::Chain, &[1000], &times);
    let b = middle_site_incoherent(Geometry::Chain, &[2001], &times);
    for (x, y) in a.iter().zip(&b) {
        assert!((x - y).abs() <= 1e-12 * x.abs(), "{x} vs {y}");
    }
    let slope = log_log_slope(&times[4..], &a[4..]);
    assert!((slope - 2.0).abs() < 0.15, "chain slope {slope}");
    let times: Vec<f64> = (5..=10).map(|k| k as f64).collect();
    let c = middle_site_incoherent(Geometry::Square, &[400, 400], &times);
    let slope = log_log_slope(&times, &c);
    assert!((slope - 3.0).abs() < 0.15, "square slope {slope}");
}

/// The h5py fixture run's record, in version 2 with every device section, then changed by
/// `edit`.
fn v2_record(edit: impl FnOnce(&mut Value)) -> Value {
    let text = std::fs::read_to_string(reference("noise/valid/chain-detuning.json")).unwrap();
    let mut v: Value = serde_json::from_str(&text).unwrap();
    v["format_version"] = serde_json::json!(2);
    v["incoherent"] = serde_json::json!([
        {"name": "T1 and T2", "acts_on": "each_site", "t1": 100.0, "t1_uncertainty": 10.0,
         "t2": 50.0, "t2_uncertainty": 5.0, "time_unit": "us"},
        {"name": "extra", "acts_on": {"sites": [0]}, "jump": "dephasing", "rate": 2.0,
         "rate_uncertainty": 0.5, "rate_unit": "1/ms"}
    ]);
    v["preparation"] = serde_json::json!([
        {"acts_on": "each_site", "trace_distance": 0.002, "trace_distance_uncertainty": 0.001}
    ]);
    v["readout"] = serde_json::json!({
        "applies_to": "all",
        "errors": [{"acts_on": "each_site", "flip_0_to_1": 0.01, "flip_1_to_0": 0.02,
                    "flip_uncertainty": 0.005}]
    });
    edit(&mut v);
    v
}

/// The h5py fixture run as `DIR/run.h5` and `record` as `DIR/noise-v2.json`.
fn place(dir: &std::path::Path, record: &Value) -> (std::path::PathBuf, std::path::PathBuf) {
    let run = dir.join("run.h5");
    std::fs::copy(reference("h5py/run_f32_gzip.h5"), &run).unwrap();
    let noise = dir.join("noise-v2.json");
    std::fs::write(&noise, serde_json::to_string_pretty(record).unwrap()).unwrap();
    (run, noise)
}

/// `quassay certify RUN --noise NOISE`, its output.
fn certify(run: &std::path::Path, noise: &std::path::Path) -> std::process::Output {
    crate::util::quassay()
        .arg("certify")
        .arg(run)
        .arg("--noise")
        .arg(noise)
        .output()
        .unwrap()
}

/// Certifies the h5py fixture run with `record`; returns the exit code, standard error and
/// whether the folder changed.
fn certify_with(record: &Value) -> (Option<i32>, String, bool, Option<Value>) {
    let dir = crate::util::scratch();
    let (run, noise) = place(dir.path(), record);
    let before = crate::util::entries(dir.path());
    let out = certify(&run, &noise);
    let changed = crate::util::entries(dir.path()) != before;
    let body = changed.then(|| crate::util::body(&dir.path().join("run.cert.json")));
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
        changed,
        body,
    )
}

/// A change to a record.
type Edit = Box<dyn FnOnce(&mut Value)>;

/// Bad device sections: exit 1, the file and the JSON pointer named, nothing written.
#[test]
fn bad_device_sections_are_refused_with_their_pointer() {
    let cases: Vec<(Edit, &str, &str)> = vec![
        (
            Box::new(|v| v["incoherent"][1]["rate"] = serde_json::json!(-1.0)),
            "/incoherent/1/rate",
            "must be ≥ 0",
        ),
        (
            Box::new(|v| v["incoherent"][0]["t2"] = serde_json::json!(250.0)),
            "/incoherent/0/t2",
            "more than 2·T1",
        ),
        (
            Box::new(|v| v["readout"]["errors"][0]["flip_1_to_0"] = serde_json::json!(1.5)),
            "/readout/errors/0/flip_1_to_0",
            "lies in [0, 1]",
        ),
        (
            Box::new(|v| v["preparation"][0]["trace_distance"] = serde_json::json!(-0.1)),
            "/preparation/0/trace_distance",
            "must be ≥ 0",
        ),
        (
            Box::new(|v| {
                v["incoherent"][1]
                    .as_object_mut()
                    .unwrap()
                    .remove("rate_unit");
            }),
            "/incoherent/1",
            "`rate_unit` is missing",
        ),
        (
            Box::new(|v| {
                v["incoherent"][0]
                    .as_object_mut()
                    .unwrap()
                    .remove("time_unit");
            }),
            "/incoherent/0",
            "`time_unit` is missing",
        ),
        (
            Box::new(|v| v["incoherent"][1]["jump"] = serde_json::json!("amplitude_damping")),
            "/incoherent/1/jump",
            "unknown value `amplitude_damping`",
        ),
        (
            Box::new(|v| v["format_version"] = serde_json::json!(1)),
            "/incoherent",
            "set `format_version` to 2",
        ),
        (
            Box::new(|v| v["readout"]["applies_to"] = serde_json::json!(["no_such_observable"])),
            "/readout/applies_to/0",
            "no observable of that name",
        ),
    ];
    for (edit, pointer, words) in cases {
        let (code, stderr, changed, _) = certify_with(&v2_record(edit));
        assert_eq!(code, Some(1), "{pointer}: {stderr}");
        assert!(stderr.contains("noise-v2.json"), "{pointer}: {stderr}");
        assert!(stderr.contains(pointer), "{pointer}: {stderr}");
        assert!(stderr.contains(words), "{pointer}: {stderr}");
        assert!(!changed, "{pointer}: something was written");
    }
}

/// A version 2 record certifies (format 1.3, every device term present and included in
/// `e_avg`); the same record in version 2 without device sections gives the body of version 1
/// except for the record's own file digest.
#[test]
fn a_version_2_record_adds_the_device_terms_and_nothing_else_changes_without_them() {
    let (code, stderr, written, body) = certify_with(&v2_record(|_| {}));
    // The fixture's values are not a simulation of this record, so the consistency checks may
    // say so (exit 3, README "Exit codes"); a certificate is written either way.
    assert!(
        matches!(code, Some(0) | Some(3)) && written,
        "{code:?}: {stderr}"
    );
    let body = body.unwrap();
    assert_eq!(body["format_minor"], 3);
    assert_eq!(body["noise"]["format_version"], 2);
    for o in body["observables"].as_array().unwrap() {
        let dev = crate::util::numbers(&o["e_device"]);
        let e_avg = crate::util::numbers(&o["e_avg"]);
        let spread = o["spread"].as_f64().unwrap();
        assert!(o["e_incoherent"].is_array() && o["e_preparation"].is_array());
        assert!(o["e_readout"].is_array());
        for (d, e) in dev.iter().zip(&e_avg) {
            assert!(*d > 0.0 && (*e >= d.min(spread)), "{} {d} {e}", o["name"]);
        }
    }
    let strip = |v: &Value| {
        let mut w = v.clone();
        for key in ["incoherent", "preparation", "readout"] {
            w.as_object_mut().unwrap().remove(key);
        }
        w
    };
    let v2 = strip(&v2_record(|_| {}));
    let mut v1 = v2.clone();
    v1["format_version"] = serde_json::json!(1);
    let (_, _, _, b2) = certify_with(&v2);
    let (_, _, _, b1) = certify_with(&v1);
    let (mut b1, mut b2) = (b1.unwrap(), b2.unwrap());
    for b in [&mut b1, &mut b2] {
        b["inputs"]["noise_record"] = Value::Null;
    }
    assert_eq!(b1, b2);
    assert!(b1.get("format_minor").is_none_or(|m| m != 3));
}

/// The device terms are shown where people read them: the summary table of `certify` (text
/// and `--json`), `review` (text and `--json`) and the report's error-budget figure, each
/// with the numbers of the certificate.
#[test]
fn the_device_terms_are_shown_in_the_summary_review_and_report() {
    let dir = crate::util::scratch();
    let record = v2_record(|v| v["readout"]["applies_to"] = serde_json::json!(["Z_1"]));
    let (run, noise) = place(dir.path(), &record);
    let cert = dir.path().join("run.cert.json");
    let out = certify(&run, &noise);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(matches!(out.status.code(), Some(0) | Some(3)), "{text}");
    for words in ["E_inc", "E_prep", "E_meas", "E_device", "not covered"] {
        assert!(text.contains(words), "summary lacks {words}: {text}");
    }
    let body = crate::util::body(&cert);
    let json_out = crate::util::quassay()
        .args(["certify", "--json", "--force", "--noise"])
        .arg(&noise)
        .arg(&run)
        .output()
        .unwrap();
    let summary: Value = serde_json::from_slice(&json_out.stdout).unwrap();
    for (o, s) in body["observables"]
        .as_array()
        .unwrap()
        .iter()
        .zip(summary["observables"].as_array().unwrap())
    {
        if o["name"] == "Z_1" {
            assert!(s["device"]["e_readout"].as_f64().unwrap() > 0.0);
        } else {
            assert_eq!(s["device"]["e_readout"], "not_covered");
        }
        let worst = crate::util::numbers(&o["e_device"])
            .iter()
            .position(|&d| d == s["device"]["e_device"].as_f64().unwrap());
        assert!(worst.is_some(), "{} {}", o["name"], s["device"]);
    }
    let review = crate::util::quassay()
        .arg("review")
        .arg(&cert)
        .output()
        .unwrap();
    let review_text = String::from_utf8_lossy(&review.stdout);
    assert!(review_text.contains("Device errors"), "{review_text}");
    assert!(review_text.contains("E_inc"), "{review_text}");
    let review_json = crate::util::quassay()
        .args(["review", "--json"])
        .arg(&cert)
        .output()
        .unwrap();
    let rj: Value = serde_json::from_slice(&review_json.stdout).unwrap();
    assert_eq!(
        rj["review"]["device_errors"].as_array().map(Vec::len),
        body["observables"].as_array().map(Vec::len)
    );
    // Full precision in --json: the worst time's e_device as in the certificate.
    let z1 = &rj["review"]["device_errors"][1];
    assert_eq!(z1["observable"], "Z_1");
    assert!(crate::util::numbers(&body["observables"][1]["e_device"])
        .contains(&z1["e_device"].as_f64().unwrap()));
    let page = dir.path().join("report.html");
    let report = crate::util::quassay()
        .arg("report")
        .arg(&cert)
        .arg("-o")
        .arg(&page)
        .output()
        .unwrap();
    assert_eq!(report.status.code(), Some(0), "{report:?}");
    let html = std::fs::read_to_string(&page).unwrap();
    assert!(html.contains("E_inc (incoherent errors)"));
    assert!(html.contains("E_prep (preparation errors)"));
    // The readout term is covered for Z_1 only: one curve.
    assert_eq!(html.matches("E_meas (readout errors)").count(), 1, "{html}");
}

/// The density-matrix evolution of `src/simulate/lindblad.rs` against QuTiP: from the product
/// state, with the fixture's jumps on every site, the open values; from the preparation
/// mixture `(1 − ε_i)|ψ_i⟩⟨ψ_i| + ε_i|ψ̄_i⟩⟨ψ̄_i|` (ψ̄ the fixture's flipped label) without
/// jumps, the prepared values; both to 1e-8 at every time.
#[test]
fn the_density_matrix_evolution_agrees_with_the_fixture() {
    let fx = fixture();
    let c = |re: f64| Complex64::new(re, 0.0);
    let ket = |x: &str| -> [f64; 2] {
        let s = std::f64::consts::FRAC_1_SQRT_2;
        match x {
            "0" => [1.0, 0.0],
            "1" => [0.0, 1.0],
            "+" => [s, s],
            "-" => [s, -s],
            other => panic!("{other}"),
        }
    };
    let flipped = |x: &str| match x {
        "0" => "1",
        "1" => "0",
        "+" => "-",
        _ => "+",
    };
    for case in fx["cases"].as_array().unwrap() {
        let (op, n) = case_operator(case);
        let labels: Vec<&str> = case["initial_state"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_str().unwrap())
            .collect();
        let eps = f64s(&case["preparation_eps"]);
        let site = |i: usize, q: f64| {
            let (g, b) = (ket(labels[i]), ket(flipped(labels[i])));
            let m = |r: usize, s: usize| c((1.0 - q) * g[r] * g[s] + q * b[r] * b[s]);
            [[m(0, 0), m(0, 1)], [m(1, 0), m(1, 1)]]
        };
        let pure: Vec<_> = (0..n).map(|i| site(i, 0.0)).collect();
        let mixed: Vec<_> = (0..n).map(|i| site(i, eps[i])).collect();
        let mut jumps = Jumps::default();
        for ch in case["channels"].as_array().unwrap() {
            let jump = Jump::parse(ch["jump"].as_str().unwrap()).unwrap();
            for s in 0..n {
                jumps.list.push((s, jump, ch["rate"].as_f64().unwrap()));
            }
        }
        let times = f64s(&case["times"]);
        for (start, jumps, key) in [(pure, jumps, "open"), (mixed, Jumps::default(), "prepared")] {
            let mut rho = Density::product(&start);
            let mut now = 0.0;
            for (k, &t) in times.iter().enumerate() {
                evolve_density(&op, &jumps, &mut rho, t - now);
                now = t;
                for o in case["observables"].as_array().unwrap() {
                    let p = PauliString::from_letters(
                        o["pauli"].as_str().unwrap(),
                        &usizes(&o["sites"]),
                    )
                    .unwrap();
                    let d = 1usize << n;
                    let mut v = Complex64::new(0.0, 0.0);
                    for b in 0..d {
                        let (b2, phase) = p.apply_to_basis(b as u64);
                        v += rho.at(b, b2 as usize) * phase;
                    }
                    let want = o[key][k].as_f64().unwrap();
                    assert!(
                        (v.re - want).abs() < QUTIP_TOL,
                        "{} {key} {} at t = {t}: {} vs QuTiP {want}",
                        case["name"],
                        o["pauli"],
                        v.re
                    );
                }
            }
        }
    }
}

/// An invented scenario with device errors: a 4-site XXZ chain from the Néel state, a site
/// detuning, and every device section (dephasing at 0.02/µs, T1 = 40 µs and T2 = 30 µs,
/// preparation trace distance 0.02, readout flips 0.01 and 0.02 for every observable).
fn device_scenario(edit: impl FnOnce(&mut Value)) -> quassay::inputs::scenario::Scenario {
    quassay::inputs::scenario::parse_scenario(&device_scenario_json(edit).to_string()).unwrap()
}

/// The JSON of [`device_scenario`].
fn device_scenario_json(edit: impl FnOnce(&mut Value)) -> Value {
    let observables: Vec<Value> = (0..4)
        .map(|k| serde_json::json!({"name": format!("Z_{k}"), "pauli": "Z", "sites": [k]}))
        .chain([
            serde_json::json!({"name": "stag", "pauli": "Z", "over": "each_site",
                                   "weights": "staggered_mean"}),
        ])
        .collect();
    let mut v = serde_json::json!({
        "format": "quassay-scenario", "format_version": 1,
        "run_id": "invented-device-rehearsal",
        "description": "Invented rehearsal of device errors on a four-site chain.",
        "time_unit": "us", "energy_unit": "MHz",
        "lattice": {"geometry": "chain", "shape": [4], "boundary": "open"},
        "hamiltonian": {"J": 0.05, "anisotropy": 0.5},
        "initial_state": "neel",
        "times": [0.0, 0.5, 1.0, 2.0, 3.0],
        "observables": observables,
        "realizations": 30, "shots": 2000, "seed": 1,
        "noise": {
            "format": "quassay-noise", "format_version": 2,
            "frequency_unit": "kHz", "redrawn": "every_realization",
            "sources": [{"name": "site detuning", "acts_on": "each_site", "operator": "Z",
                         "amplitude": 5.0, "distribution": {"family": "uniform"},
                         "mean_offset": 0.0, "mean_offset_uncertainty": 0.0}],
            "incoherent": [
                {"name": "dephasing", "acts_on": "each_site", "jump": "dephasing",
                 "rate": 0.02, "rate_uncertainty": 0.0, "rate_unit": "1/us"},
                {"name": "T1 and T2", "acts_on": "each_site", "t1": 40.0, "t1_uncertainty": 0.0,
                 "t2": 30.0, "t2_uncertainty": 0.0, "time_unit": "us"}
            ],
            "preparation": [{"acts_on": "each_site", "trace_distance": 0.02,
                             "trace_distance_uncertainty": 0.0}],
            "readout": {"applies_to": "all", "errors": [{"acts_on": "each_site",
                        "flip_0_to_1": 0.01, "flip_1_to_0": 0.02, "flip_uncertainty": 0.0}]}
        }
    });
    edit(&mut v);
    v
}

/// Rehearsal of device errors by exact simulation (density matrices): for 20 seeds the run is
/// certified with its version 2 record. (a) The checks pass (docs/method.md §7.5): at least 19
/// of 20 consistent. (b) Coverage: the certified interval holds the ideal model's value
/// (`truth.ideal`, no noise, no device error) at every time and for every observable, in
/// at least 19 of 20 seeds. (c) The same data with the record's device sections removed fail
/// the checks at t = 0 in at least 19 of 20 seeds: the device errors are visible and the
/// terms are what makes (a) and (b) hold. (d) The truth's exact value at t = 0 is the closed
/// form with preparation flips and readout: for `Z_0` (site 0 starts in |0⟩, flipped with
/// probability q), `(1 − q)(1 − 2p01) − q(1 − 2p10)`.
#[test]
fn device_errors_are_rehearsed_and_the_certificate_covers_them() {
    use quassay::certificate::body::CertifyOptions;
    use quassay::certificate::certify::compute_body;
    let s = device_scenario(|_| {});
    let dir = crate::util::scratch();
    let (mut consistent, mut covered, mut flagged_without) = (0, 0, 0);
    // The run in `dir` certified with the record `name` beside it (the path certify takes).
    let with_record = |name: &str| {
        compute_body(
            &dir.path().join("run.h5"),
            &dir.path().join(name),
            "run.h5".into(),
            name.into(),
            &CertifyOptions::default(),
        )
        .unwrap()
    };
    for seed in 1..21u64 {
        let sim = quassay::simulate::run::simulate(&s, seed);
        // (d): Z_0 at t = 0 with q = 0.02, p01 = 0.01, p10 = 0.02 (arithmetic by hand).
        let z0 = &sim
            .truth
            .observables
            .iter()
            .find(|o| o.name == "Z_0")
            .unwrap();
        let want = 0.98 * (1.0 - 0.02) - 0.02 * (1.0 - 0.04);
        for r in 0..3 {
            assert!(
                (z0.exact[[r, 0]] - want).abs() < 1e-12,
                "{}",
                z0.exact[[r, 0]]
            );
        }
        crate::util::write_inputs(&s, seed, dir.path());
        let c = with_record("noise.json");
        consistent += usize::from(c.checks.consistent());
        // Term by term (docs/method.md §7.2): at t = 0 only each term's own site counts, so the
        // staggered mean (weights ±1/4, spread 2 each) has E_prep = 4 · (1/4) · 2 · 0.02 = 0.04,
        // not the whole support's 2 · 4 · 0.02 = 0.16; likewise Z_0 has 2 · 0.02.
        for o in c.body["observables"].as_array().unwrap() {
            let e = crate::util::numbers(&o["e_preparation"])[0];
            assert!((e / 0.04 - 1.0).abs() < 1e-12, "{}: {e}", o["name"]);
        }
        let mut all = true;
        for (o, t) in c.body["observables"]
            .as_array()
            .unwrap()
            .iter()
            .zip(&sim.truth.observables)
        {
            assert_eq!(o["name"], t.name.as_str());
            let lo = crate::util::numbers(&o["certified_lower"]);
            let hi = crate::util::numbers(&o["certified_upper"]);
            for (k, ideal) in t.ideal.iter().enumerate() {
                all &= lo[k] <= *ideal && *ideal <= hi[k];
            }
        }
        covered += usize::from(all);
        // (c): the record without its device sections.
        let text = std::fs::read_to_string(dir.path().join("noise.json")).unwrap();
        let mut v: Value = serde_json::from_str(&text).unwrap();
        for key in ["incoherent", "preparation", "readout"] {
            v.as_object_mut().unwrap().remove(key);
        }
        v["format_version"] = serde_json::json!(1);
        std::fs::write(dir.path().join("plain.json"), v.to_string()).unwrap();
        let plain = with_record("plain.json");
        flagged_without += usize::from(plain.checks.preparation_failures() > 0);
    }
    assert!(consistent >= 19, "only {consistent} of 20 consistent");
    assert!(covered >= 19, "only {covered} of 20 covered");
    assert!(
        flagged_without >= 19,
        "only {flagged_without} of 20 flagged without"
    );
}

/// What a scenario with device errors may not do: too many sites, noise redrawn every shot,
/// a preparation_error key beside them, a readout name that is no observable; each refused
/// with its pointer.
#[test]
fn scenarios_with_device_errors_have_limits() {
    let cases: Vec<(Edit, &str, &str)> = vec![
        (
            Box::new(|v| {
                v["lattice"]["shape"] = serde_json::json!([9]);
                v["observables"] = serde_json::json!([{"name": "Z_0", "pauli": "Z", "sites": [0]}]);
            }),
            "/noise/incoherent",
            "at most 8 sites",
        ),
        (
            Box::new(|v| v["noise"]["redrawn"] = serde_json::json!("every_shot")),
            "/noise/redrawn",
            "every_realization or once",
        ),
        (
            Box::new(|v| v["preparation_error"] = serde_json::json!({"flip_probability": 0.1})),
            "/preparation_error",
            "cannot be combined",
        ),
        (
            Box::new(|v| v["noise"]["readout"]["applies_to"] = serde_json::json!(["Z_9"])),
            "/noise/readout/applies_to/0",
            "no observable",
        ),
    ];
    for (edit, pointer, words) in cases {
        let v = device_scenario_json(edit);
        let problems = quassay::inputs::scenario::parse_scenario(&v.to_string()).unwrap_err();
        assert!(
            problems
                .iter()
                .any(|p| p.path == pointer && p.message.contains(words)),
            "{pointer}: {problems:?}"
        );
    }
}

/// The scenario schema accepts a scenario with device sections and refuses them in a version 1
/// record, as the reader does.
#[test]
fn the_scenario_schema_knows_the_device_sections() {
    let text =
        std::fs::read_to_string(crate::util::repo().join("schemas/scenario.schema.json")).unwrap();
    let schema: Value = serde_json::from_str(&text).unwrap();
    let validator = jsonschema::draft202012::new(&schema).unwrap();
    assert!(validator.is_valid(&device_scenario_json(|_| {})));
    let v1 = device_scenario_json(|v| v["noise"]["format_version"] = serde_json::json!(1));
    assert!(!validator.is_valid(&v1));
    assert!(quassay::inputs::scenario::parse_scenario(&v1.to_string()).is_err());
}
