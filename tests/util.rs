//! Shared helpers for the integration tests: a fresh folder per test, the binary, the repo.

#![allow(dead_code)]

use std::path::{Path, PathBuf};

/// The repository root (where Cargo.toml is).
pub fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A file under `tests/reference/`.
pub fn reference(rel: &str) -> PathBuf {
    repo().join("tests").join("reference").join(rel)
}

/// A fresh temporary folder, removed when dropped.
pub fn scratch() -> tempfile::TempDir {
    tempfile::tempdir().expect("temporary folder")
}

/// The `quassay` binary, ready to be given arguments.
pub fn quassay() -> assert_cmd::Command {
    assert_cmd::Command::cargo_bin("quassay").expect("the quassay binary is built")
}

/// Names of the entries of a folder, sorted.
pub fn entries(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .collect()
        })
        .unwrap_or_default();
    v.sort();
    v
}
