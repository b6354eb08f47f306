//! The README's "Your own data" steps, run exactly as written (a new user's path: NumPy arrays
//! → `assemble` → `inspect` → `certify` → `review`), with this build's binary first on PATH.

use crate::util::{doc_block, python_has, scratch};

#[test]
fn the_readme_steps_for_your_own_data_run_as_written() {
    if !python_has(&["numpy"]) {
        return;
    }
    let block = doc_block("README.md", "## Your own data", "sh");
    let bin = assert_cmd::cargo::cargo_bin("quassay");
    let path = format!(
        "{}:{}",
        bin.parent().unwrap().display(),
        std::env::var("PATH").unwrap_or_default()
    );
    let dir = scratch();
    let out = std::process::Command::new("bash")
        .args(["-e", "-c", &block])
        .current_dir(dir.path())
        .env("PATH", path)
        // `mktemp -d` in the block makes its folder inside this test's scratch folder.
        .env("TMPDIR", dir.path())
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stdout}\n{stderr}");
    for expected in [
        "inspect finds no problem",
        "layout        no problems found",
        "certificate run.cert.json written",
        "Verdict: consistent",
    ] {
        assert!(stdout.contains(expected), "{expected:?} in:\n{stdout}");
    }
}
