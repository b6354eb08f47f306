//! Unit tests of the consistency check: exact simulations of the one-spin Ramsey scenario of
//! docs/method.md §3 against the record that made them, and against a wrong one.

use super::*;
use crate::bounds::confidence::Simultaneity;
use crate::bounds::run_bounds::evaluate_run;
use crate::model::Observable;
use crate::model::{
    Boundary, Family, FrequencyUnit, Geometry, Hamiltonian, Instance, Lattice, Shots, TimeUnit,
};
use ndarray::Array2;
use rand::{Rng, SeedableRng};

const TIMES: [f64; 4] = [0.0, 0.5, 1.0, 2.0];

fn observable(name: &str, values: Array2<f64>, shots: u64, ideal: Option<Vec<f64>>) -> Observable {
    Observable {
        name: name.into(),
        values,
        shots: Shots::Uniform(shots),
        stderr: None,
        ideal,
        support: vec![0],
        spectrum_min: -1.0,
        spectrum_max: 1.0,
        description: None,
        terms: None,
        two_outcomes: false,
    }
}

fn run(observables: Vec<Observable>) -> Run {
    Run {
        run_id: "invented-ramsey-check".into(),
        time_unit: TimeUnit::Us,
        description: Some("invented scenario for the consistency checks".into()),
        times: TIMES.to_vec(),
        lattice: Lattice::regular(Geometry::Chain, &[1], Boundary::Open).unwrap(),
        hamiltonian: Hamiltonian {
            energy_unit: FrequencyUnit::RadPerUs,
            bond_norm_max: 0.0,
            bond_norms: None,
            interaction_range: 1,
        },
        observables,
    }
}

fn record(delta: f64, redrawn: Redrawn) -> NoiseModel {
    NoiseModel {
        redrawn,
        instances: vec![Instance {
            source: 0,
            support: vec![0],
            bond: None,
            delta,
            family: Family::Uniform,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: None,
        }],
        device: Default::default(),
    }
}

/// An exact simulation of the one-spin Ramsey scenario of docs/method.md §3 (H = 0, |+⟩, one
/// source δ g Z with g uniform on [−1, 1] redrawn every realization): ⟨X⟩ = cos(2δgt),
/// ⟨Y⟩ = sin(2δgt) in closed form, and each shot is ±1 with P(+1) = (1 + ⟨O⟩)/2.
fn simulate(delta_true: f64, r: usize, shots: u64, seed: u64) -> Run {
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(seed);
    let mut x = Array2::zeros((r, TIMES.len()));
    let mut y = Array2::zeros((r, TIMES.len()));
    for i in 0..r {
        let g: f64 = rng.random_range(-1.0..=1.0);
        for (k, &t) in TIMES.iter().enumerate() {
            let phase = 2.0 * delta_true * g * t;
            for (a, mean) in [(&mut x, phase.cos()), (&mut y, phase.sin())] {
                let mut sum = 0i64;
                for _ in 0..shots {
                    sum += if rng.random::<f64>() < 0.5 * (1.0 + mean) {
                        1
                    } else {
                        -1
                    };
                }
                a[[i, k]] = sum as f64 / shots as f64;
            }
        }
    }
    let ideal_x = Some(vec![1.0; TIMES.len()]);
    let ideal_y = Some(vec![0.0; TIMES.len()]);
    run(vec![
        observable("X", x, shots, ideal_x),
        observable("Y", y, shots, ideal_y),
    ])
}

fn check(run: &Run, noise: &NoiseModel) -> ChecksReport {
    let bounds = evaluate_run(run, noise, 0.95, Simultaneity::Simultaneous).unwrap();
    check_run(run, noise, &bounds, 0.01)
}

/// Values with a sample variance exactly equal to V_noise + V_shot (±a around 0, with
/// a² = (R−1)/R·allowed) give X = R − 1, the χ² median region: every test passes.
#[test]
fn data_with_exactly_the_allowed_variance_pass() {
    let (r, shots, delta) = (50usize, 100u64, 0.05);
    let noise = record(delta, Redrawn::EveryRealization);
    let mut values = Array2::zeros((r, TIMES.len()));
    for (k, &t) in TIMES.iter().enumerate() {
        // V_noise = δ²σ²(s_O t)² with σ² = 1/3, s_O = 2; the interval for the mean 0
        // contains the midpoint of [−1, 1], so V_shot = 1·(1/S).
        let allowed = delta * delta / 3.0 * (2.0 * t) * (2.0 * t) + 1.0 / shots as f64;
        let a = ((r - 1) as f64 / r as f64 * allowed).sqrt();
        for i in 0..r {
            values[[i, k]] = if i % 2 == 0 { a } else { -a };
        }
    }
    let run = run(vec![observable("Y", values, shots, None)]);
    let rep = check(&run, &noise);
    assert!(rep.consistent(), "{:?}", rep.failures());
    assert_eq!(rep.n_tests, TIMES.len());
    for pc in &rep.observables[0].points {
        let v = pc.variance.as_ref().unwrap();
        assert!(
            (v.statistic - (r - 1) as f64).abs() < 1e-9,
            "{}",
            v.statistic
        );
        assert!(v.p_value > 0.4 && v.p_value < 0.6);
    }
    assert_eq!(rep.verdict_json()["status"], "consistent");
    // V_noise > 0 at t > 0, and the data show just the allowed spread: the implied scale
    // is below 1.
    let s = rep.observables[0].implied_scale.value.unwrap();
    assert!(s < 1.0, "{s}");
}

/// The exact simulation under the recorded noise passes; with 20 times the recorded
/// amplitude the variance tests fail at every t > 0 (and the distribution-free test
/// agrees), the t = 0 tests do not, and the implied scale is well above 1.
#[test]
fn the_exact_simulation_passes_and_twenty_times_the_noise_fails() {
    let noise = record(0.05, Redrawn::EveryRealization);
    let ok = check(&simulate(0.05, 200, 100, 11), &noise);
    assert!(ok.consistent(), "{:?}", ok.failures());
    assert_eq!(ok.n_tests, 2 * 2 * TIMES.len());

    let bad = check(&simulate(1.0, 200, 100, 12), &noise);
    assert!(!bad.consistent());
    let variance: Vec<&Failure> = bad
        .failures()
        .iter()
        .filter(|f| f.test == TestKind::Variance)
        .collect();
    for name in ["X", "Y"] {
        let times: Vec<usize> = variance
            .iter()
            .filter(|f| f.observable == name)
            .map(|f| f.time_index)
            .collect();
        assert_eq!(times, [1, 2, 3], "{name}");
    }
    assert!(variance.iter().all(|f| f.category == Category::NoiseRecord));
    // The distribution-free test has much less power: in this seeded run it confirms two
    // of the six variance failures (X at t = 2, Y at t = 1), not the others.
    let confirmed = variance
        .iter()
        .filter(|f| f.distribution_free_rejects == Some(true))
        .count();
    assert!(variance
        .iter()
        .all(|f| f.distribution_free_rejects.is_some()));
    assert!(confirmed >= 1 && confirmed < variance.len(), "{confirmed}");
    assert!(bad.failures().iter().all(|f| f.time > 0.0));
    // ⟨X⟩ averages to sin(2t)/(2t), far from the ideal 1 for t ≥ 1.
    assert!(bad
        .failures()
        .iter()
        .any(|f| f.observable == "X" && f.test == TestKind::IdealReference));
    for oc in &bad.observables {
        assert_eq!(oc.earliest_failure, Some(1));
        assert!(
            oc.implied_scale.value.unwrap() > 5.0,
            "{:?}",
            oc.implied_scale
        );
    }
    let v = bad.verdict_json();
    assert_eq!(v["status"], "inconsistent");
    assert_eq!(v["failed_tests"], bad.failures().len());
    assert_eq!(v["failed_at_time_zero"], 0);
    // The grouped list names every failure once, and each named point's adjusted p-value
    // (kept in `observables`) is at most the level.
    let all = bad.to_json();
    let groups = all["failures"].as_array().unwrap();
    let mut named = 0;
    for g in groups {
        let k = all["observables"]
            .as_array()
            .unwrap()
            .iter()
            .position(|o| o["name"] == g["observable"])
            .unwrap();
        let test = g["test"].as_str().unwrap();
        let p = &all["observables"][k][test]["adjusted_p_value"];
        for i in g["time_indices"].as_array().unwrap() {
            let i = i.as_u64().unwrap() as usize;
            assert!(p[i].as_f64().unwrap() <= 0.01, "{g}");
            named += 1;
        }
    }
    assert_eq!(named, bad.failures().len());
}

/// One realization: the variance tests are reported as not possible, with the reason;
/// the ideal check still runs.
#[test]
fn one_realization_makes_the_variance_checks_not_possible() {
    let noise = record(0.05, Redrawn::EveryRealization);
    let rep = check(&simulate(0.05, 1, 100, 3), &noise);
    assert!(rep
        .variance_not_possible
        .as_deref()
        .unwrap()
        .contains("one realization"));
    assert!(rep
        .observables
        .iter()
        .all(|o| o.points.iter().all(|p| p.variance.is_none())));
    assert_eq!(rep.n_tests, 2 * TIMES.len());
    let j = rep.to_json();
    assert_eq!(j["variance"]["status"], "not_possible");
    assert!(j["observables"][0]["implied_noise_scale"]["value"].is_null());
    assert!(j["observables"][0]["implied_noise_scale"]["reason"]
        .as_str()
        .unwrap()
        .contains("one realization"));
}

/// An offset at t = 0 (a preparation error) is caught by the ideal check there and
/// reported as a preparation or measurement problem.
#[test]
fn an_offset_at_time_zero_is_a_preparation_problem() {
    let noise = record(0.05, Redrawn::EveryRealization);
    let mut run = simulate(0.05, 100, 100, 5);
    for v in run.observables[0].values.column_mut(0).iter_mut() {
        *v -= 0.3; // ⟨X⟩ = 0.7 at t = 0 instead of 1
    }
    let rep = check(&run, &noise);
    let f = rep.failures();
    assert_eq!(f.len(), 1, "{f:?}");
    assert_eq!((f[0].time_index, f[0].test), (0, TestKind::IdealReference));
    assert_eq!(f[0].category, Category::PreparationOrMeasurement);
    assert_eq!(rep.preparation_failures(), 1);
    assert!(rep.verdict_json()["text"]
        .as_str()
        .unwrap()
        .contains("preparation"));
    assert_eq!(rep.to_json()["observables"][0]["t0"]["rejected"], true);
}

/// With the noise redrawn every shot or once, V_noise = 0 and the implied scale is null
/// with a reason; the record is still tested against the shot noise.
#[test]
fn no_noise_variance_without_redraws_between_realizations() {
    for redrawn in [Redrawn::EveryShot, Redrawn::Once] {
        let noise = record(0.05, redrawn);
        let rep = check(&simulate(0.0, 60, 100, 8), &noise);
        assert!(rep.consistent(), "{redrawn:?}: {:?}", rep.failures());
        for oc in &rep.observables {
            assert!(oc
                .points
                .iter()
                .all(|p| p.variance.as_ref().unwrap().v_noise == 0.0));
            assert!(oc.implied_scale.value.is_none() && oc.implied_scale.reason.is_some());
        }
    }
}

/// The ideal-reference p-value is the ε at which the interval just excludes the ideal:
/// the half-width there, from a full `evaluate_point` (pointwise, ε split in halves),
/// equals the deviation. The mean is placed at half the ε = 1e-6 half-width from the
/// ideal at every time, t = 0 included.
#[test]
fn the_ideal_p_value_is_where_the_interval_reaches_the_deviation() {
    use crate::bounds::global::{evaluate_point, PointInputs, ShotData};
    let noise = record(0.05, Redrawn::EveryRealization);
    let run = simulate(0.05, 20, 100, 9);
    let bounds = evaluate_run(&run, &noise, 0.95, Simultaneity::Simultaneous).unwrap();
    let o = &run.observables[0];
    let shots = vec![100u64; 20];
    let full = |t: f64, eps: f64| {
        evaluate_point(&PointInputs {
            s_o: 2.0,
            t,
            sources: &bounds.sources,
            sensitivities: None,
            redrawn: Redrawn::EveryRealization,
            realizations: 20,
            shots: ShotData::Counts(&shots),
            p: 0.5 * eps,
            alpha: 0.5 * eps,
            p_single: eps,
        })
        .half_width
    };
    let ideal = o.ideal.as_ref().unwrap();
    let mean: Vec<f64> = TIMES
        .iter()
        .zip(ideal)
        .map(|(&t, &i)| i - 0.5 * full(t, 1e-6))
        .collect();
    let plan = CheckPlan::new(&run.times, &bounds.sources, noise.redrawn, 20, 1, 1, 0.01);
    let oc = plan.observable(o, &mean, &bounds.observables[0].points, None);
    for (pc, &t) in oc.points.iter().zip(&TIMES) {
        let test = pc.ideal.as_ref().unwrap();
        let (p, dev) = (test.p_value, test.deviation.abs());
        assert!(p > 1e-6 && p < 1.0, "t={t}: {p}");
        assert!((full(t, p) / dev - 1.0).abs() < 1e-6, "t={t}");
        assert!(dev > full(t, p), "t={t}: p must be on the rejecting side");
    }
    let inside = plan.observable(o, ideal, &bounds.observables[0].points, None);
    assert!(inside
        .points
        .iter()
        .all(|pc| pc.ideal.as_ref().unwrap().p_value == 1.0));
}

#[test]
fn an_unusable_level_is_reported_not_silently_passed() {
    let noise = record(0.05, Redrawn::EveryRealization);
    let run = simulate(0.05, 5, 10, 1);
    let bounds = evaluate_run(&run, &noise, 0.95, Simultaneity::Simultaneous).unwrap();
    let rep = check_run(&run, &noise, &bounds, 1.5);
    assert!(rep.not_performed.is_some());
    assert_eq!(rep.verdict_json()["status"], "not_tested");
    assert_eq!(rep.to_json()["status"], "not_performed");
}

/// Device errors in the checks (docs/method.md §7.5), on exact simulations of the Ramsey spin:
/// each realization prepares the spin tilted from |+⟩ towards |0⟩ by a Bloch angle θ_r with
/// sin(θ_r/2) ≤ 0.1 (trace distance at most 0.1) and reads it with a flip probability p_r ≤ 0.03
/// of its own, so ⟨X⟩ = (1 − 2p_r) cos θ_r cos(2δgt) in closed form. Under the record that
/// declares these errors the checks pass; without them the offset at t = 0 (about 0.04) is
/// flagged there as a preparation problem.
#[test]
fn declared_device_errors_are_allowed_by_the_checks() {
    use crate::model::device::{AppliesTo, DeviceModel};
    let (r, shots, delta) = (100usize, 1000u64, 0.05);
    let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(17);
    let mut x = Array2::zeros((r, TIMES.len()));
    for i in 0..r {
        let g: f64 = rng.random_range(-1.0..=1.0);
        let theta = 2.0 * (rng.random_range(0.0..=0.1f64)).asin();
        let p: f64 = rng.random_range(0.0..=0.03);
        for (k, &t) in TIMES.iter().enumerate() {
            let mean = (1.0 - 2.0 * p) * theta.cos() * (2.0 * delta * g * t).cos();
            let mut sum = 0i64;
            for _ in 0..shots {
                sum += if rng.random::<f64>() < 0.5 * (1.0 + mean) {
                    1
                } else {
                    -1
                };
            }
            x[[i, k]] = sum as f64 / shots as f64;
        }
    }
    let run = run(vec![observable(
        "X",
        x,
        shots,
        Some(vec![1.0; TIMES.len()]),
    )]);
    let plain = record(delta, Redrawn::EveryRealization);
    let rep = check(&run, &plain);
    assert!(!rep.consistent());
    assert!(rep.preparation_failures() >= 1, "{:?}", rep.failures());
    let mut declared = plain.clone();
    declared.device = DeviceModel {
        incoherent: None,
        preparation: Some(vec![0.1]),
        readout: Some((vec![0.03], AppliesTo::All)),
    };
    let rep = check(&run, &declared);
    assert!(rep.consistent(), "{:?}", rep.failures());
}
