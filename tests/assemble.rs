//! `quassay assemble`: NumPy arrays and a description in, a run file out.
//!
//! The outside reference is h5py (tests/reference/arrays/make_fixtures.py): the same content
//! written by h5py and assembled by quassay must certify to the same body, with equal content
//! digests of every dataset, although the files' bytes differ (supports as attributes there, as
//! datasets here; float32 there, float64 here for one observable; gzip here only).

use std::fs::File;
use std::path::Path;

use ndarray::{array, Array2};
use ndarray_npy::WriteNpyExt;
use serde_json::{json, Value};

use crate::util::{certified, entries, quassay, reference, scratch};

/// The fixture folder copied into `dir` (description, arrays, h5py's run file, noise record).
fn copy_fixtures(dir: &Path) {
    for name in [
        "description.json",
        "times.npy",
        "traces.npz",
        "bond_norms.npy",
        "run_h5py.h5",
        "noise.json",
    ] {
        std::fs::copy(reference(&format!("arrays/{name}")), dir.join(name)).unwrap();
    }
}

fn certify(dir: &Path, run: &str) -> Value {
    let sub = dir.join(run.trim_end_matches(".h5"));
    std::fs::create_dir(&sub).unwrap();
    // The same file name in both folders, so that the bodies may be compared whole.
    std::fs::copy(dir.join(run), sub.join("run.h5")).unwrap();
    quassay()
        .arg("certify")
        .arg(sub.join("run.h5"))
        .arg("--noise")
        .arg(dir.join("noise.json"))
        .assert()
        .code(0);
    certified(&sub.join("run.cert.json"))
}

#[test]
fn assembled_arrays_certify_like_the_same_content_written_by_h5py() {
    let dir = scratch();
    copy_fixtures(dir.path());
    let out = quassay()
        .arg("assemble")
        .arg(dir.path().join("description.json"))
        .arg("-o")
        .arg(dir.path().join("assembled.h5"))
        .assert()
        .code(0);
    let text = String::from_utf8_lossy(&out.get_output().stdout).to_string();
    assert!(text.contains("inspect finds no problem"), "{text}");
    quassay()
        .arg("inspect")
        .arg(dir.path().join("assembled.h5"))
        .assert()
        .code(0);

    let ours = certify(dir.path(), "assembled.h5");
    let h5py = certify(dir.path(), "run_h5py.h5");
    let (a, b) = (
        &ours["body"]["inputs"]["run"],
        &h5py["body"]["inputs"]["run"],
    );
    assert_eq!(a["datasets"], b["datasets"], "content digests");
    assert_eq!(a["datasets"].as_array().unwrap().len(), 11);
    assert_ne!(a["sha256"], b["sha256"], "the files' bytes differ");
    let strip = |c: &Value| {
        let mut body = c["body"].clone();
        for key in ["sha256", "size"] {
            body["inputs"]["run"][key] = Value::Null;
        }
        body
    };
    assert_eq!(strip(&ours), strip(&h5py));
}

/// Runs `assemble` on the fixture description edited by `edit`, after `arrays` added files;
/// asserts exit 1 and that nothing was written, and returns standard error.
fn refused(edit: impl FnOnce(&mut Value), arrays: impl FnOnce(&Path)) -> String {
    let dir = scratch();
    copy_fixtures(dir.path());
    arrays(dir.path());
    let path = dir.path().join("description.json");
    let mut d: Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    edit(&mut d);
    std::fs::write(&path, serde_json::to_string_pretty(&d).unwrap()).unwrap();
    let before = entries(dir.path());
    let out = quassay()
        .arg("assemble")
        .arg(&path)
        .arg("-o")
        .arg(dir.path().join("run.h5"))
        .assert()
        .code(1);
    assert_eq!(entries(dir.path()), before, "nothing written");
    String::from_utf8_lossy(&out.get_output().stderr).to_string()
}

fn save(dir: &Path, name: &str, a: &impl WriteNpyExt) {
    a.write_npy(File::create(dir.join(name)).unwrap()).unwrap();
}

#[test]
fn bad_arrays_exit_1_naming_the_array_and_the_fix_with_nothing_written() {
    let e = refused(
        |d| d["observables"]["Z_2"]["values"] = json!("short.npy"),
        |dir| save(dir, "short.npy", &Array2::<f64>::zeros((4, 5))),
    );
    assert!(
        e.contains("/observables/Z_2/values")
            && e.contains("short.npy")
            && e.contains("[4, 5]")
            && e.contains("R × 6"),
        "{e}"
    );
    let e = refused(
        |d| d["observables"]["Z_2"]["values"] = json!("nan.npy"),
        |dir| {
            let mut a = Array2::<f64>::zeros((4, 6));
            a[[2, 3]] = f64::NAN;
            save(dir, "nan.npy", &a)
        },
    );
    assert!(
        e.contains("nan.npy") && e.contains("NaN") && e.contains("[2, 3]"),
        "{e}"
    );
    let e = refused(
        |d| d["observables"]["XX_1_3"]["spectrum"] = json!([-0.5, 0.5]),
        |_| {},
    );
    assert!(
        e.contains("array 'XX_1_3' of")
            && e.contains("outside the spectrum [-0.5, 0.5]")
            && e.contains("`spectrum`"),
        "{e}"
    );
    let e = refused(
        |d| d["times"] = json!("labels.npy"),
        |dir| save(dir, "labels.npy", &array![true, false, true]),
    );
    assert!(
        e.contains("/times") && e.contains("labels.npy") && e.contains("store it as float64"),
        "{e}"
    );
    let e = refused(
        |d| {
            d.as_object_mut().unwrap().remove("time_unit");
        },
        |_| {},
    );
    assert!(
        e.contains("/time_unit") && e.contains("never assumed"),
        "{e}"
    );
    // A check that only the written file's reader makes (outcome counts of a two-outcome
    // observable): still nothing written.
    let e = refused(|d| d["observables"]["Z_2"]["shots"] = json!(7), |_| {});
    assert!(
        e.contains("two outcomes") && e.contains("nothing was written"),
        "{e}"
    );
}

#[test]
fn an_existing_output_is_kept_without_force() {
    let dir = scratch();
    copy_fixtures(dir.path());
    let out = dir.path().join("run.h5");
    std::fs::write(&out, b"keep me").unwrap();
    let run = |force: bool| {
        let mut c = quassay();
        c.arg("assemble")
            .arg(dir.path().join("description.json"))
            .arg("-o")
            .arg(&out);
        if force {
            c.arg("--force");
        }
        c.assert()
    };
    run(false).code(1);
    assert_eq!(std::fs::read(&out).unwrap(), b"keep me");
    run(true).code(0);
    quassay().arg("inspect").arg(&out).assert().code(0);
}

#[test]
fn a_magnetisation_of_ten_thousand_sites_is_assembled_with_its_support_as_a_dataset() {
    // 10^4 sites: a support attribute would be 80 kB, over HDF5's 64 KiB default.
    let dir = scratch();
    let n = 10_000usize;
    save(dir.path(), "m.npy", &Array2::<f64>::zeros((2, 1)));
    let d = json!({
        "format": "quassay-arrays", "format_version": 1, "run_id": "invented-large",
        "time_unit": "us", "times": [0.5],
        "lattice": {"geometry": "square", "shape": [100, 100]},
        "hamiltonian": {"energy_unit": "MHz", "bond_norm_max": 1.0},
        "observables": {"M": {"values": "m.npy", "shots": 100, "spectrum": [-1, 1],
                              "support": (0..n).collect::<Vec<_>>()}}
    });
    std::fs::write(dir.path().join("d.json"), d.to_string()).unwrap();
    quassay()
        .arg("assemble")
        .arg(dir.path().join("d.json"))
        .arg("-o")
        .arg(dir.path().join("run.h5"))
        .assert()
        .code(0);
    let out = quassay()
        .args(["inspect", "--json"])
        .arg(dir.path().join("run.h5"))
        .assert()
        .code(0);
    let v: Value = serde_json::from_slice(&out.get_output().stdout).unwrap();
    let support = &v["summary"]["observables"][0]["support"];
    assert_eq!(
        support.as_array().map(Vec::len),
        Some(n),
        "{}",
        v["summary"]
    );
}

#[test]
fn the_description_schema_accepts_the_fixture_and_refuses_what_the_reader_refuses() {
    let text =
        std::fs::read_to_string(crate::util::repo().join("schemas/arrays.schema.json")).unwrap();
    let schema: Value = serde_json::from_str(&text).unwrap();
    assert!(jsonschema::meta::is_valid(&schema));
    let v = jsonschema::draft202012::new(&schema).unwrap();
    let good: Value = serde_json::from_str(
        &std::fs::read_to_string(reference("arrays/description.json")).unwrap(),
    )
    .unwrap();
    assert!(v.is_valid(&good));
    for edit in [
        (|d: &mut Value| {
            d.as_object_mut().unwrap().remove("time_unit");
        }) as fn(&mut Value),
        |d| d["observables"]["Z_2"]["shots"] = json!(0),
        |d| d["observables"]["Z_2"]["colour"] = json!("red"),
        |d| d["lattice"]["geometry"] = json!("graph"),
        |d| d["format_version"] = json!(2),
    ] {
        let mut bad = good.clone();
        edit(&mut bad);
        assert!(!v.is_valid(&bad), "{bad}");
    }
}
