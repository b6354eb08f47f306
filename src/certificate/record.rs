//! How a certificate names its inputs: a path relative to the certificate, the file's size and
//! SHA-256, and a content digest of every dataset used.
//!
//! The content digest (defined in `docs/certificate.md`) is taken over the numbers as the reader
//! interprets them, not over the file's bytes: repacking a run (other chunking, compression,
//! byte order, float32 stored as float64) keeps it, while changing any value breaks it.

use std::path::{Component, Path, PathBuf};

use serde_json::{json, Value};

use super::hash::{sha256_file, ContentHasher, ContentKind};
use crate::error::{Error, Result};
use crate::inputs::run_file::{ContentSink, ObservableOutline, RunOutline};
use crate::model::{Geometry, Run, Shots};

/// One input file as the certificate records it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FileRecord {
    /// Path relative to the certificate's folder, with `/` separators.
    pub path: String,
    /// Size in bytes.
    pub size: u64,
    /// SHA-256 of the file's bytes, lowercase hex.
    pub sha256: String,
}

impl FileRecord {
    /// Hashes `file` and records it under the name `recorded`.
    pub fn of(file: &Path, recorded: String) -> Result<FileRecord> {
        // A FIFO or device would block the read or never end it (certify hashes the run on a
        // thread of its own, which a hang would keep from being joined).
        crate::inputs::regular::check_regular(file, "a regular file")?;
        let (size, sha256) = sha256_file(file).map_err(|source| Error::Read {
            path: file.to_path_buf(),
            source,
        })?;
        Ok(FileRecord {
            path: recorded,
            size,
            sha256,
        })
    }

    /// The JSON form in the body.
    pub fn to_json(&self) -> Value {
        json!({ "path": self.path, "size": self.size, "sha256": self.sha256 })
    }
}

/// The name under which `input` is recorded in a certificate written to `certificate`: its path
/// relative to the certificate's folder when it lies below that folder, otherwise its file name
/// alone (`verify` then needs `--inputs DIR`). The second value says which case applied.
pub fn recorded_name(input: &Path, certificate: &Path) -> (String, bool) {
    let file_name = input
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| input.to_string_lossy().into_owned());
    let cert_dir = match certificate.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let (Ok(dir), Ok(abs)) = (cert_dir.canonicalize(), input.canonicalize()) else {
        return (file_name, false);
    };
    match abs.strip_prefix(&dir) {
        Ok(rel) if !rel.as_os_str().is_empty() => {
            let parts: Vec<String> = rel
                .components()
                .map(|c| c.as_os_str().to_string_lossy().into_owned())
                .collect();
            (parts.join("/"), true)
        }
        _ => (file_name, false),
    }
}

/// Checks that a recorded path stays inside the inputs folder: relative, no `..`, not empty.
/// Returns the path to open below `base`, or why it is refused.
pub fn resolve_recorded(base: &Path, recorded: &str) -> std::result::Result<PathBuf, String> {
    if recorded.is_empty() {
        return Err("the recorded path is empty".into());
    }
    if recorded.contains('\\') {
        return Err(format!(
            "the recorded path '{recorded}' contains a backslash; paths use '/' separators"
        ));
    }
    let p = Path::new(recorded);
    for c in p.components() {
        match c {
            Component::Normal(_) | Component::CurDir => {}
            Component::ParentDir => {
                return Err(format!(
                    "the recorded path '{recorded}' climbs out of the inputs folder with '..'"
                ))
            }
            Component::RootDir | Component::Prefix(_) => {
                return Err(format!(
                    "the recorded path '{recorded}' is absolute; certificates record paths relative to their folder"
                ))
            }
        }
    }
    Ok(base.join(p))
}

/// The content digest of one dataset used.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DatasetDigest {
    /// HDF5 path of the dataset.
    pub path: String,
    pub kind: ContentKind,
    pub shape: Vec<usize>,
    /// Lowercase hex SHA-256 of the content (see `docs/certificate.md`).
    pub sha256: String,
}

impl DatasetDigest {
    fn floats(path: String, shape: Vec<usize>, values: impl Iterator<Item = f64>) -> Self {
        let mut h = ContentHasher::new(ContentKind::F64, &shape);
        let v: Vec<f64> = values.collect();
        h.push_f64(&v);
        DatasetDigest {
            path,
            kind: ContentKind::F64,
            shape,
            sha256: h.finish(),
        }
    }

    fn ints(path: String, shape: Vec<usize>, values: impl Iterator<Item = i64>) -> Self {
        let mut h = ContentHasher::new(ContentKind::I64, &shape);
        let v: Vec<i64> = values.collect();
        h.push_i64(&v);
        DatasetDigest {
            path,
            kind: ContentKind::I64,
            shape,
            sha256: h.finish(),
        }
    }

    /// The JSON form in the body.
    pub fn to_json(&self) -> Value {
        json!({
            "path": self.path,
            "kind": match self.kind { ContentKind::F64 => "f64", ContentKind::I64 => "i64" },
            "shape": self.shape,
            "content_sha256": self.sha256,
        })
    }
}

/// Content digests of every dataset of `run` that the certificate uses, in a fixed order:
/// `/times`, `/lattice/bonds` (graphs only), `/hamiltonian/bond_norms` (if given), then per
/// observable (sorted by name) `values`, `shots` (if a dataset), `stderr`, `ideal`,
/// `terms_support` (rows padded with −1 to the longest term), `terms_weight`, `terms_spectrum`.
pub fn dataset_digests(run: &Run) -> Vec<DatasetDigest> {
    let mut out = header_digests(&RunOutline::of(run));
    for o in &run.observables {
        let base = format!("/observables/{}", o.name);
        let shape = o.values.shape().to_vec();
        out.push(DatasetDigest::floats(
            format!("{base}/values"),
            shape.clone(),
            o.values.iter().copied(),
        ));
        if let Shots::PerPoint(s) = &o.shots {
            out.push(DatasetDigest::ints(
                format!("{base}/shots"),
                s.shape().to_vec(),
                s.iter().map(|&x| i64::try_from(x).unwrap_or(i64::MAX)),
            ));
        }
        if let Some(se) = &o.stderr {
            out.push(DatasetDigest::floats(
                format!("{base}/stderr"),
                se.shape().to_vec(),
                se.iter().copied(),
            ));
        }
        out.extend(small_digests(&ObservableOutline::of(o)));
    }
    out
}

/// The first digests of [`dataset_digests`]: `/times`, `/lattice/bonds` (graphs only),
/// `/hamiltonian/bond_norms` (if given).
pub fn header_digests(run: &RunOutline) -> Vec<DatasetDigest> {
    let mut out = Vec::new();
    out.push(DatasetDigest::floats(
        "/times".into(),
        vec![run.times.len()],
        run.times.iter().copied(),
    ));
    if run.lattice.geometry() == Geometry::Graph {
        let b = run.lattice.bonds();
        out.push(DatasetDigest::ints(
            "/lattice/bonds".into(),
            vec![b.len(), 2],
            b.iter().flat_map(|e| [i64::from(e[0]), i64::from(e[1])]),
        ));
    }
    if let Some(norms) = &run.hamiltonian.bond_norms {
        out.push(DatasetDigest::floats(
            "/hamiltonian/bond_norms".into(),
            vec![norms.len()],
            norms.iter().copied(),
        ));
    }
    out
}

/// The digests of an observable's small datasets, which follow its R × T ones: `ideal`,
/// `terms_support`, `terms_weight`, `terms_spectrum`.
pub fn small_digests(o: &ObservableOutline) -> Vec<DatasetDigest> {
    let base = format!("/observables/{}", o.name);
    let mut out = Vec::new();
    if let Some(ideal) = &o.ideal {
        out.push(DatasetDigest::floats(
            format!("{base}/ideal"),
            vec![ideal.len()],
            ideal.iter().copied(),
        ));
    }
    if let Some(terms) = &o.terms {
        let width = terms.supports.iter().map(Vec::len).max().unwrap_or(0);
        out.push(DatasetDigest::ints(
            format!("{base}/terms_support"),
            vec![terms.supports.len(), width],
            terms
                .supports
                .iter()
                .flat_map(|s| (0..width).map(move |j| s.get(j).map_or(-1, |&x| x as i64))),
        ));
        out.push(DatasetDigest::floats(
            format!("{base}/terms_weight"),
            vec![terms.weights.len()],
            terms.weights.iter().copied(),
        ));
        out.push(DatasetDigest::floats(
            format!("{base}/terms_spectrum"),
            vec![terms.spectra.len(), 2],
            terms.spectra.iter().flat_map(|s| [s[0], s[1]]),
        ));
    }
    out
}

/// The R × T digests of an observable, in the order the reader streams them: `values`,
/// `shots` (if a dataset), `stderr` (if given).
pub fn streamed_paths(o: &ObservableOutline) -> Vec<String> {
    let base = format!("/observables/{}", o.name);
    let mut out = vec![format!("{base}/values")];
    if o.per_point_shots {
        out.push(format!("{base}/shots"));
    }
    if o.has_stderr {
        out.push(format!("{base}/stderr"));
    }
    out
}

/// A [`ContentSink`] that digests the streamed datasets on the calling thread.
#[derive(Default)]
pub struct DigestSink {
    current: Option<(String, ContentKind, Vec<usize>, ContentHasher)>,
    /// The digests, in stream order.
    pub digests: Vec<DatasetDigest>,
}

impl ContentSink for DigestSink {
    fn begin(&mut self, path: &str, kind: ContentKind, shape: &[usize]) {
        let h = ContentHasher::new(kind, shape);
        self.current = Some((path.to_string(), kind, shape.to_vec(), h));
    }
    fn floats(&mut self, values: &[f64]) {
        if let Some((_, _, _, h)) = self.current.as_mut() {
            h.push_f64(values);
        }
    }
    fn ints(&mut self, values: &[i64]) {
        if let Some((_, _, _, h)) = self.current.as_mut() {
            h.push_i64(values);
        }
    }
    fn end(&mut self) {
        if let Some((path, kind, shape, h)) = self.current.take() {
            self.digests.push(DatasetDigest {
                path,
                kind,
                shape,
                sha256: h.finish(),
            });
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn recorded_paths_may_not_leave_the_inputs_folder() {
        let base = Path::new("/data/certs");
        assert_eq!(
            resolve_recorded(base, "run.h5").unwrap(),
            PathBuf::from("/data/certs/run.h5")
        );
        assert_eq!(
            resolve_recorded(base, "sub/run.h5").unwrap(),
            PathBuf::from("/data/certs/sub/run.h5")
        );
        assert!(resolve_recorded(base, "../run.h5").is_err());
        assert!(resolve_recorded(base, "sub/../../run.h5").is_err());
        assert!(resolve_recorded(base, "/etc/passwd").is_err());
        assert!(resolve_recorded(base, "").is_err());
        assert!(resolve_recorded(base, "a\\..\\b").is_err());
    }

    #[test]
    fn an_input_beside_the_certificate_is_recorded_by_its_relative_path() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::create_dir(dir.path().join("data")).unwrap();
        let run = dir.path().join("data").join("run.h5");
        std::fs::write(&run, b"x").unwrap();
        let cert = dir.path().join("run.cert.json");
        assert_eq!(
            recorded_name(&run, &cert),
            ("data/run.h5".to_string(), true)
        );
        let elsewhere = tempfile::tempdir().unwrap();
        let cert2 = elsewhere.path().join("c.json");
        assert_eq!(recorded_name(&run, &cert2), ("run.h5".to_string(), false));
    }
}
