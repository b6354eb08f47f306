//! Snapshot tests (the `insta` crate; snapshots in tests/snapshots/) of the text printed for
//! people: `certify`'s summary, `review` and `budget`, on the bundled invented examples, once
//! as recorded and once with every noise amplitude × 50 so that bounds reach the observable's
//! range. They show the formatting rule of `numbers::short` (four significant digits, units,
//! "vacuous", "unbounded"); a change of that text is reviewed with `cargo insta review`.
//!
//! The temporary folder's path is replaced by `[DIR]`; everything else is deterministic
//! (certificates reproduce byte for byte).

use std::path::Path;

use serde_json::Value;

use crate::util::{quassay, repo, scratch};

/// The example `chain12` copied into `dir`, its noise amplitudes multiplied by `scale`.
fn example(dir: &Path, scale: f64) {
    let example = repo().join("example_runs/chain12");
    std::fs::copy(example.join("run.h5"), dir.join("run.h5")).unwrap();
    let text = std::fs::read_to_string(example.join("noise.json")).unwrap();
    let mut record: Value = serde_json::from_str(&text).unwrap();
    for s in record["sources"].as_array_mut().unwrap() {
        s["amplitude"] = serde_json::json!(s["amplitude"].as_f64().unwrap() * scale);
    }
    std::fs::write(dir.join("noise.json"), record.to_string()).unwrap();
}

fn stdout(dir: &Path, args: &[&str]) -> String {
    let out = quassay().current_dir(dir).args(args).output().unwrap();
    String::from_utf8_lossy(&out.stdout).replace(&dir.display().to_string(), "[DIR]")
}

#[test]
fn certify_and_review_text_as_recorded() {
    let dir = scratch();
    example(dir.path(), 1.0);
    insta::assert_snapshot!(
        "certify_chain12",
        stdout(dir.path(), &["certify", "run.h5", "--noise", "noise.json"])
    );
    insta::assert_snapshot!(
        "review_chain12",
        stdout(dir.path(), &["review", "run.cert.json"])
    );
}

#[test]
fn certify_and_review_text_where_bounds_are_vacuous() {
    let dir = scratch();
    example(dir.path(), 50.0);
    insta::assert_snapshot!(
        "certify_chain12_vacuous",
        stdout(dir.path(), &["certify", "run.h5", "--noise", "noise.json"])
    );
    insta::assert_snapshot!(
        "review_chain12_vacuous",
        stdout(dir.path(), &["review", "run.cert.json"])
    );
}

#[test]
fn budget_text() {
    let noise = repo().join("example_runs/square3x4/noise.json");
    let noise = noise.to_str().unwrap();
    let out = quassay()
        .args(["budget", "--noise", noise, "--lattice", "square:10x10"])
        .args(["--time-unit", "us", "--spectrum", "-1,1", "--target", "0.1"])
        .args(["--time", "1", "--shots", "1000", "--realizations", "20"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout).replace(noise, "[NOISE]");
    insta::assert_snapshot!("budget_square10", text);
}
