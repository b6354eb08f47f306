//! Unit tests of the array description: a full description read into a run, and each kind of
//! bad array reported at its pointer with the array named.

use std::fs::File;

use ndarray::{array, Array2};
use ndarray_npy::{NpzWriter, WriteNpyExt};
use serde_json::json;

use super::*;

/// An invented 2 × 2 square array, three times, two realizations; arrays in `dir`.
fn write_arrays(dir: &Path) {
    array![0.0, 0.5, 1.0]
        .write_npy(File::create(dir.join("times.npy")).unwrap())
        .unwrap();
    let mut npz = NpzWriter::new(File::create(dir.join("data.npz")).unwrap());
    npz.add_array("Z_0", &array![[1.0, 0.5, 0.0], [1.0, 0.25, -0.5]])
        .unwrap();
    npz.add_array("M", &array![[0.5f32, 0.25, 0.0], [0.75, 0.5, 0.25]])
        .unwrap();
    npz.add_array("shots_M", &Array2::<i32>::from_elem((2, 3), 200))
        .unwrap();
    npz.finish().unwrap();
}

fn description() -> Value {
    json!({
        "format": "quassay-arrays", "format_version": 1,
        "run_id": "invented-2x2", "time_unit": "us",
        "times": "times.npy",
        "lattice": {"geometry": "square", "shape": [2, 2], "boundary": "open"},
        "hamiltonian": {"energy_unit": "MHz", "bond_norm_max": 1.0},
        "observables": {
            "Z_0": {"values": {"file": "data.npz", "array": "Z_0"}, "shots": 100,
                    "support": [0], "spectrum": [-1, 1], "ideal": [1.0, 0.5, 0.0]},
            "M": {"values": {"file": "data.npz", "array": "M"},
                  "shots": {"file": "data.npz", "array": "shots_M"}, "spectrum": [-1, 1],
                  "terms": {"support": [[0], [1], [2], [3]], "weight": [0.25, 0.25, 0.25, 0.25],
                            "spectrum": [[-1, 1], [-1, 1], [-1, 1], [-1, 1]]}}
        }
    })
}

#[test]
fn a_full_description_reads_into_the_run_it_describes() {
    let dir = tempfile::tempdir().unwrap();
    write_arrays(dir.path());
    let a = assemble_from_value(&description(), dir.path()).unwrap();
    let run = &a.run;
    assert_eq!(run.times, vec![0.0, 0.5, 1.0]);
    assert_eq!(run.lattice.n_sites(), 4);
    // Sorted by name, bytewise: "M" < "Z_0".
    assert_eq!(run.observables[0].name, "M");
    assert_eq!(run.observables[1].support, vec![0]);
    assert_eq!(run.observables[1].shots, Shots::Uniform(100));
    assert_eq!(run.observables[0].shots.at(1, 2), 200);
    assert_eq!(run.observables[0].terms.as_ref().unwrap().supports.len(), 4);
    // One float64 values array: stored as float64.
    assert!(!a.all_float32);
    assert_eq!(a.files.len(), 2);
}

/// The problems of `edit` applied to the description, as "pointer: message" lines.
fn problems_after(edit: impl FnOnce(&mut Value), arrays: impl FnOnce(&Path)) -> Vec<String> {
    let dir = tempfile::tempdir().unwrap();
    write_arrays(dir.path());
    arrays(dir.path());
    let mut d = description();
    edit(&mut d);
    assemble_from_value(&d, dir.path())
        .unwrap_err()
        .into_iter()
        .map(|p| format!("{}: {}", p.path, p.message))
        .collect()
}

#[test]
fn bad_arrays_are_named_with_the_fix() {
    // Wrong shape: 2 × 4 values for 3 times.
    let p = problems_after(
        |d| d["observables"]["Z_0"]["values"] = json!("wide.npy"),
        |dir| {
            Array2::<f64>::zeros((2, 4))
                .write_npy(File::create(dir.join("wide.npy")).unwrap())
                .unwrap()
        },
    );
    assert!(
        p.iter().any(|m| m.starts_with("/observables/Z_0/values:")
            && m.contains("wide.npy")
            && m.contains("[2, 4]")
            && m.contains("R × 3")),
        "{p:?}"
    );
    // NaN.
    let p = problems_after(
        |d| d["observables"]["Z_0"]["values"] = json!("nan.npy"),
        |dir| {
            array![[0.0, f64::NAN, 0.0], [0.0, 0.0, 0.0]]
                .write_npy(File::create(dir.join("nan.npy")).unwrap())
                .unwrap()
        },
    );
    assert!(
        p.iter()
            .any(|m| m.contains("nan.npy") && m.contains("NaN") && m.contains("[0, 1]")),
        "{p:?}"
    );
    // Outside the spectrum.
    let p = problems_after(
        |d| d["observables"]["Z_0"]["spectrum"] = json!([0, 1]),
        |_| {},
    );
    assert!(
        p.iter().any(|m| m.contains("array 'Z_0' of")
            && m.contains("outside the spectrum")
            && m.contains("`spectrum`")),
        "{p:?}"
    );
    // Wrong dtype: booleans.
    let p = problems_after(
        |d| d["observables"]["Z_0"]["values"] = json!("flags.npy"),
        |dir| {
            Array2::<bool>::from_elem((2, 3), false)
                .write_npy(File::create(dir.join("flags.npy")).unwrap())
                .unwrap()
        },
    );
    assert!(
        p.iter()
            .any(|m| m.contains("flags.npy") && m.contains("b1") && m.contains("float64")),
        "{p:?}"
    );
    // Missing time unit.
    let p = problems_after(
        |d| {
            d.as_object_mut().unwrap().remove("time_unit");
        },
        |_| {},
    );
    assert!(
        p.iter()
            .any(|m| m.starts_with("/time_unit:") && m.contains("never assumed")),
        "{p:?}"
    );
    // A missing array file.
    let p = problems_after(|d| d["times"] = json!("nowhere.npy"), |_| {});
    assert!(
        p.iter()
            .any(|m| m.starts_with("/times:") && m.contains("nowhere.npy")),
        "{p:?}"
    );
    // Different realizations per observable.
    let p = problems_after(
        |d| d["observables"]["Z_0"]["values"] = json!([[0.0, 0.0, 0.0]]),
        |_| {},
    );
    assert!(
        p.iter()
            .any(|m| m.contains("has 1 realizations") && m.contains("observable M has 2")),
        "{p:?}"
    );
}

#[test]
fn all_problems_are_reported_in_one_pass() {
    let p = problems_after(
        |d| {
            d["format_version"] = json!(2);
            d["observables"]["Z_0"]["support"] = json!([7]);
            d["observables"]["M"]["shots"] = json!(0);
        },
        |_| {},
    );
    assert_eq!(p.len(), 3, "{p:?}");
}
