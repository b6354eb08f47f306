//! Integration tests for run files: reading a file written by h5py (an independent HDF5 writer)
//! against the numbers NumPy stored beside it, rewriting it with quassay's writer, and
//! `quassay inspect` on broken files (exit code 1, the HDF5 path named, nothing written).

use std::path::{Path, PathBuf};
use std::str::FromStr;

use hdf5::types::VarLenUnicode;
use ndarray::{array, Array2};
use quassay::inputs::run_file::read_run;
use quassay::model::Shots;
use quassay::outputs::run_file::{write_run, WriteOptions};

use crate::util::{entries, quassay, reference, scratch};

/// The fixture written by `tests/reference/h5py/make_fixtures.py` (h5py 3.16 / HDF5 2.0.0):
/// float32 values, chunked + gzip + shuffle, big-endian times, int32 shots dataset.
fn fixture() -> PathBuf {
    reference("h5py/run_f32_gzip.h5")
}

fn side_file() -> serde_json::Value {
    let text = std::fs::read_to_string(reference("h5py/run_f32_gzip.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn matrix(v: &serde_json::Value) -> Array2<f64> {
    let rows: Vec<Vec<f64>> = serde_json::from_value(v.clone()).unwrap();
    let (r, t) = (rows.len(), rows[0].len());
    Array2::from_shape_vec((r, t), rows.concat()).unwrap()
}

#[test]
fn an_h5py_file_reads_as_numpy_stored_it_and_the_same_as_quassays_rewrite() {
    let run = read_run(&fixture()).unwrap();
    let side = side_file();
    // Outside source: the decimal text NumPy wrote of the arrays h5py stored (float32 widened
    // to float64 exactly, so equality is exact).
    let times: Vec<f64> = serde_json::from_value(side["times"].clone()).unwrap();
    assert_eq!(run.times, times);
    assert_eq!(run.n_sites(), 4);
    assert_eq!(run.n_realizations(), 3);
    let names: Vec<&str> = run.observables.iter().map(|o| o.name.as_str()).collect();
    assert_eq!(names, ["ZZ_mean", "Z_1"], "sorted bytewise");
    let zz = &run.observables[0];
    let z = &run.observables[1];
    assert_eq!(z.values, matrix(&side["observables"]["Z_1"]["values"]));
    let shots = matrix(&side["observables"]["Z_1"]["shots"]).mapv(|s| s as u64);
    assert_eq!(z.shots, Shots::PerPoint(shots));
    let ideal: Vec<f64> =
        serde_json::from_value(side["observables"]["Z_1"]["ideal"].clone()).unwrap();
    assert_eq!(z.ideal.as_deref(), Some(&ideal[..]));
    assert_eq!(z.support, [1]);
    assert_eq!((z.spectrum_min, z.spectrum_max), (-1.0, 1.0));
    assert_eq!(zz.values, matrix(&side["observables"]["ZZ_mean"]["values"]));
    assert_eq!(
        zz.stderr,
        Some(matrix(&side["observables"]["ZZ_mean"]["stderr"]))
    );
    assert_eq!(zz.shots, Shots::Uniform(400));
    let terms = zz.terms.as_ref().unwrap();
    assert_eq!(terms.supports, [vec![0, 1], vec![1, 2], vec![2, 3]]);
    let w: Vec<f64> =
        serde_json::from_value(side["observables"]["ZZ_mean"]["terms_weight"].clone()).unwrap();
    assert_eq!(terms.weights, w);
    assert_eq!(
        run.hamiltonian.bond_norms.as_deref(),
        Some(&[0.5, 0.75, 0.5][..])
    );

    // Rewritten by quassay as float64, contiguous, uncompressed: the same model.
    let dir = scratch();
    let copy = dir.path().join("rewritten.h5");
    write_run(&copy, &run, &WriteOptions::default()).unwrap();
    assert_eq!(read_run(&copy).unwrap(), run);
}

#[test]
fn inspect_summarises_a_valid_file_and_exits_zero() {
    let out = quassay().arg("inspect").arg(fixture()).assert().success();
    let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    assert!(text.contains("invented-h5py-0001"), "{text}");
    assert!(text.contains("R = 3"), "{text}");
    assert!(text.contains("52 to 193 shots per point"), "{text}");
    assert!(text.contains("no problems found"), "{text}");

    let out = quassay()
        .arg("inspect")
        .arg(fixture())
        .arg("--json")
        .assert()
        .success();
    let v: serde_json::Value = serde_json::from_slice(&out.get_output().stdout).unwrap();
    assert_eq!(v["valid"], true);
    assert_eq!(v["summary"]["realizations"], 3);
    assert_eq!(v["summary"]["times"]["count"], 5);
    assert_eq!(v["summary"]["observables"][1]["name"], "Z_1");
    assert_eq!(v["summary"]["observables"][1]["stored_as"], "float32");
    assert_eq!(v["summary"]["observables"][0]["terms"], 3);
    assert_eq!(v["problems"].as_array().unwrap().len(), 0);
}

/// A copy of the fixture in a fresh folder, changed by `change`.
fn broken(change: impl FnOnce(&hdf5::File)) -> (tempfile::TempDir, PathBuf) {
    let dir = scratch();
    let path = dir.path().join("run.h5");
    std::fs::copy(fixture(), &path).unwrap();
    let f = hdf5::File::open_rw(&path).unwrap();
    change(&f);
    drop(f);
    (dir, path)
}

/// Runs `quassay inspect` on `path`: exit code 1, standard error names every `expected`
/// fragment (the HDF5 path and the complaint), and the folder gains no file.
fn rejects(dir: &Path, path: &Path, expected: &[&str]) -> String {
    let before = entries(dir);
    let out = quassay().arg("inspect").arg(path).assert().code(1);
    let err = String::from_utf8(out.get_output().stderr.clone()).unwrap();
    for e in expected {
        assert!(err.contains(e), "expected {e:?} in:\n{err}");
    }
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(entries(dir), before, "inspect must not write anything");
    err
}

fn set_str(loc: &hdf5::Location, name: &str, value: &str) {
    if loc.attr_names().unwrap().iter().any(|n| n == name) {
        loc.delete_attr(name).unwrap();
    }
    let v = VarLenUnicode::from_str(value).unwrap();
    loc.new_attr::<VarLenUnicode>()
        .shape(())
        .create(name)
        .unwrap()
        .as_writer()
        .write_scalar(&v)
        .unwrap();
}

fn replace_f64(g: &hdf5::Group, name: &str, data: Array2<f64>) {
    g.unlink(name).unwrap();
    g.new_dataset_builder()
        .with_data(&data)
        .create(name)
        .unwrap();
}

fn z_values() -> Array2<f64> {
    read_run(&fixture()).unwrap().observables[1].values.clone()
}

#[test]
fn a_missing_times_dataset_is_named() {
    let (d, p) = broken(|f| f.unlink("times").unwrap());
    rejects(d.path(), &p, &["/times: is missing"]);
}

#[test]
fn nan_in_values_is_named_with_its_position() {
    let (d, p) = broken(|f| {
        let mut v = z_values();
        v[[1, 3]] = f64::NAN;
        replace_f64(&f.group("observables/Z_1").unwrap(), "values", v);
    });
    rejects(d.path(), &p, &["/observables/Z_1/values:", "NaN", "[1, 3]"]);
}

#[test]
fn a_wrong_format_is_rejected() {
    let (d, p) = broken(|f| set_str(f, "format", "some-other-run"));
    rejects(d.path(), &p, &["/: attribute `format`", "quassay-run"]);
}

#[test]
fn an_unknown_time_unit_is_rejected() {
    let (d, p) = broken(|f| set_str(f, "time_unit", "µs"));
    rejects(d.path(), &p, &["/: attribute `time_unit`", "s, ms, us, ns"]);
}

#[test]
fn an_unknown_energy_unit_is_rejected() {
    let (d, p) = broken(|f| set_str(&f.group("hamiltonian").unwrap(), "energy_unit", "mhz"));
    rejects(
        d.path(),
        &p,
        &["/hamiltonian: attribute `energy_unit`", "MHz"],
    );
}

#[test]
fn a_support_site_beyond_the_lattice_is_rejected() {
    let (d, p) = broken(|f| {
        let g = f.group("observables/Z_1").unwrap();
        g.delete_attr("support").unwrap();
        g.new_attr_builder()
            .with_data(&array![4i64])
            .create("support")
            .unwrap();
    });
    rejects(
        d.path(),
        &p,
        &["/observables/Z_1: attribute `support`", "n_sites = 4"],
    );
}

#[test]
fn a_support_dataset_is_read_and_checked_like_the_attribute() {
    // The dataset form (a minor extension of layout v1, docs/run-format.md): a site beyond the
    // lattice is refused at the dataset's path; both forms at once are refused.
    let (d, p) = broken(|f| {
        let g = f.group("observables/Z_1").unwrap();
        g.delete_attr("support").unwrap();
        g.new_dataset_builder()
            .with_data(&array![4i64])
            .create("support")
            .unwrap();
    });
    rejects(d.path(), &p, &["/observables/Z_1/support", "n_sites = 4"]);
    let (d, p) = broken(|f| {
        let g = f.group("observables/Z_1").unwrap();
        g.new_dataset_builder()
            .with_data(&array![1i64])
            .create("support")
            .unwrap();
    });
    rejects(
        d.path(),
        &p,
        &[
            "/observables/Z_1/support",
            "both as an attribute and as a dataset",
        ],
    );
    let (_d, p) = broken(|f| {
        let g = f.group("observables/Z_1").unwrap();
        g.delete_attr("support").unwrap();
        g.new_dataset_builder()
            .with_data(&array![1i64])
            .create("support")
            .unwrap();
    });
    assert_eq!(read_run(&p).unwrap().observables[1].support, vec![1]);
}

#[test]
fn a_value_outside_the_spectrum_is_rejected() {
    let (d, p) = broken(|f| {
        let mut v = z_values();
        v[[0, 0]] = 1.5;
        replace_f64(&f.group("observables/Z_1").unwrap(), "values", v);
    });
    rejects(
        d.path(),
        &p,
        &[
            "/observables/Z_1/values:",
            "outside the spectrum [-1, 1]",
            "first 1.5 at [0, 0]",
        ],
    );
}

#[test]
fn values_of_the_wrong_shape_are_rejected() {
    let (d, p) = broken(|f| {
        let g = f.group("observables/ZZ_mean").unwrap();
        replace_f64(&g, "values", Array2::zeros((3, 4)));
    });
    rejects(
        d.path(),
        &p,
        &["/observables/ZZ_mean/values:", "shape [3, 4]", "5 times"],
    );
}

#[test]
fn negative_shots_are_rejected() {
    let (d, p) = broken(|f| {
        let g = f.group("observables/Z_1").unwrap();
        g.unlink("shots").unwrap();
        let mut s = Array2::<i32>::from_elem((3, 5), 100);
        s[[2, 4]] = -5;
        g.new_dataset_builder()
            .with_data(&s)
            .create("shots")
            .unwrap();
    });
    rejects(
        d.path(),
        &p,
        &["/observables/Z_1/shots:", "below 1", "[2, 4]"],
    );
}

#[test]
fn decreasing_times_are_rejected() {
    let (d, p) = broken(|f| {
        f.unlink("times").unwrap();
        let t = array![0.0, 1.0, 0.5, 1.5, 2.0];
        f.new_dataset_builder()
            .with_data(&t)
            .create("times")
            .unwrap();
    });
    rejects(d.path(), &p, &["/times:", "decrease at index 2"]);
}

#[test]
fn a_graph_without_bonds_is_rejected() {
    let (d, p) = broken(|f| {
        let l = f.group("lattice").unwrap();
        set_str(&l, "geometry", "graph");
        l.delete_attr("shape").unwrap();
        l.unlink("bonds").unwrap();
    });
    rejects(d.path(), &p, &["/lattice/bonds: is missing"]);
}

#[test]
fn bonds_that_disagree_with_the_geometry_are_rejected() {
    let (d, p) = broken(|f| {
        let l = f.group("lattice").unwrap();
        l.unlink("bonds").unwrap();
        let b = array![[0i64, 1], [2, 3], [1, 2]];
        l.new_dataset_builder()
            .with_data(&b)
            .create("bonds")
            .unwrap();
    });
    rejects(
        d.path(),
        &p,
        &[
            "/lattice/bonds:",
            "does not agree",
            "bond 1 (stored [2, 3], expected [1, 2])",
        ],
    );
}

#[test]
fn an_observable_name_with_a_space_is_rejected() {
    let (d, p) = broken(|f| {
        f.group("observables")
            .unwrap()
            .relink("Z_1", "Z 1")
            .unwrap()
    });
    rejects(d.path(), &p, &["/observables/Z 1:", "rename the group"]);
}

#[test]
fn several_problems_are_all_reported_at_once() {
    let (d, p) = broken(|f| {
        f.unlink("times").unwrap();
        set_str(f, "time_unit", "minutes");
        set_str(&f.group("hamiltonian").unwrap(), "energy_unit", "eV");
        let mut v = z_values();
        v[[0, 1]] = f64::INFINITY;
        replace_f64(&f.group("observables/Z_1").unwrap(), "values", v);
    });
    let err = rejects(
        d.path(),
        &p,
        &[
            "/times:",
            "`time_unit`",
            "`energy_unit`",
            "/observables/Z_1/values:",
        ],
    );
    assert!(err.contains("has 4 problems"), "{err}");
}

#[test]
fn files_that_are_not_hdf5_give_one_clear_message() {
    let dir = scratch();
    let text = dir.path().join("notes.h5");
    std::fs::write(&text, "this is not HDF5\n").unwrap();
    rejects(dir.path(), &text, &["notes.h5", "/: is not an HDF5 file"]);
    let empty = dir.path().join("empty.h5");
    std::fs::write(&empty, "").unwrap();
    rejects(dir.path(), &empty, &["empty.h5", "empty (0 bytes)"]);
    let folder = dir.path().join("folder.h5");
    std::fs::create_dir(&folder).unwrap();
    rejects(
        dir.path(),
        &folder,
        &["cannot read", "folder.h5", "it is a folder"],
    );
    let missing = dir.path().join("missing.h5");
    rejects(dir.path(), &missing, &["cannot read", "missing.h5"]);
}

#[test]
fn inspect_leaves_the_input_untouched() {
    let dir = scratch();
    let path = dir.path().join("run.h5");
    std::fs::copy(fixture(), &path).unwrap();
    let bytes = std::fs::read(&path).unwrap();
    let mtime = std::fs::metadata(&path).unwrap().modified().unwrap();
    quassay().arg("inspect").arg(&path).assert().success();
    quassay()
        .arg("inspect")
        .arg(&path)
        .arg("--json")
        .assert()
        .success();
    read_run(&path).unwrap();
    assert_eq!(std::fs::read(&path).unwrap(), bytes);
    assert_eq!(std::fs::metadata(&path).unwrap().modified().unwrap(), mtime);
    assert_eq!(entries(dir.path()), ["run.h5"]);
}

#[test]
fn the_h5py_recipe_of_the_run_format_page_writes_a_valid_run_file() {
    if !crate::util::python_has(&["numpy", "h5py"]) {
        return;
    }
    let recipe =
        crate::util::doc_block("docs/run-format.md", "## A complete h5py recipe", "python");
    let dir = crate::util::scratch();
    let mut child = std::process::Command::new("python3")
        .arg("-")
        .current_dir(dir.path())
        .stdin(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    use std::io::Write as _;
    child
        .stdin
        .take()
        .unwrap()
        .write_all(recipe.as_bytes())
        .unwrap();
    assert!(child.wait().unwrap().success(), "the recipe runs");
    crate::util::quassay()
        .arg("inspect")
        .arg(dir.path().join("run.h5"))
        .assert()
        .code(0);
}
