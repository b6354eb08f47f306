//! Atomic creation of one file, or of a set of files in one folder.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

fn parent_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// Fails with [`Error::OutputExists`] if `path` exists and `force` is false.
pub fn check_free(path: &Path, force: bool) -> Result<()> {
    if !force && path.exists() {
        return Err(Error::OutputExists {
            path: path.to_path_buf(),
        });
    }
    Ok(())
}

/// Creates `path` atomically: `write` fills a temporary file beside it (given by path, so that
/// libraries such as HDF5 can create it themselves), which is renamed into place only if
/// `write` succeeds. Without `force`, an existing `path` is an error and is left untouched.
pub fn write_file(path: &Path, force: bool, write: impl FnOnce(&Path) -> Result<()>) -> Result<()> {
    check_free(path, force)?;
    let dir = parent_of(path);
    let tmp = tempfile::Builder::new()
        .prefix(".quassay-")
        .suffix(".part")
        .tempfile_in(dir)
        .map_err(|e| Error::Write {
            path: path.to_path_buf(),
            message: format!("cannot create a temporary file in '{}': {e}", dir.display()),
        })?;
    // The temporary file is removed when `tmp` is dropped, on success or failure of `write`.
    write(tmp.path())?;
    make_readable(tmp.path());
    let result = if force {
        tmp.persist(path).map(|_| ())
    } else {
        tmp.persist_noclobber(path).map(|_| ())
    };
    result.map_err(|e| {
        if e.error.kind() == std::io::ErrorKind::AlreadyExists {
            Error::OutputExists {
                path: path.to_path_buf(),
            }
        } else {
            Error::Write {
                path: path.to_path_buf(),
                message: e.error.to_string(),
            }
        }
    })
}

/// Temporary files are created readable by their owner only; outputs are meant to be shared
/// (certificates, reports, runs), so they get the usual `rw-r--r--` before the rename.
fn make_readable(path: &Path) {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let _ = std::fs::set_permissions(path, std::fs::Permissions::from_mode(0o644));
    }
    #[cfg(not(unix))]
    let _ = path;
}

/// Writes bytes to `path` atomically (see [`write_file`]).
pub fn write_bytes(path: &Path, force: bool, bytes: &[u8]) -> Result<()> {
    write_file(path, force, |tmp| {
        std::fs::write(tmp, bytes).map_err(|e| Error::Write {
            path: path.to_path_buf(),
            message: e.to_string(),
        })
    })
}

/// Creates the files `names` in folder `dir` (created if missing) as one unit: `write` fills a
/// temporary folder inside `dir`, then every file is renamed into place. Without `force`, any
/// existing file of that name is an error before anything is written. If a rename fails, the
/// files already moved are removed again.
pub fn write_files(
    dir: &Path,
    names: &[&str],
    force: bool,
    write: impl FnOnce(&Path) -> Result<()>,
) -> Result<Vec<PathBuf>> {
    let finals: Vec<PathBuf> = names.iter().map(|n| dir.join(n)).collect();
    for f in &finals {
        check_free(f, force)?;
    }
    std::fs::create_dir_all(dir).map_err(|e| Error::Write {
        path: dir.to_path_buf(),
        message: format!("cannot create the folder: {e}"),
    })?;
    let tmp = tempfile::Builder::new()
        .prefix(".quassay-")
        .suffix(".part")
        .tempdir_in(dir)
        .map_err(|e| Error::Write {
            path: dir.to_path_buf(),
            message: format!("cannot create a temporary folder: {e}"),
        })?;
    write(tmp.path())?;
    for name in names {
        make_readable(&tmp.path().join(name));
    }
    let mut moved = Vec::new();
    for (name, fin) in names.iter().zip(&finals) {
        let from = tmp.path().join(name);
        let renamed = if !force && fin.exists() {
            Err(Error::OutputExists { path: fin.clone() })
        } else {
            std::fs::rename(&from, fin).map_err(|e| Error::Write {
                path: fin.clone(),
                message: e.to_string(),
            })
        };
        if let Err(e) = renamed {
            for m in &moved {
                let _ = std::fs::remove_file(m);
            }
            return Err(e);
        }
        moved.push(fin.clone());
    }
    Ok(finals)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_failed_write_leaves_nothing_behind() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out.json");
        let r = write_file(&target, false, |tmp| {
            std::fs::write(tmp, b"half").unwrap();
            Err(Error::Options("stop".into()))
        });
        assert!(r.is_err());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }

    #[test]
    fn an_existing_file_is_kept_without_force_and_replaced_with_it() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out.json");
        std::fs::write(&target, b"old").unwrap();
        let r = write_bytes(&target, false, b"new");
        assert!(matches!(r, Err(Error::OutputExists { .. })));
        assert_eq!(std::fs::read(&target).unwrap(), b"old");
        write_bytes(&target, true, b"new").unwrap();
        assert_eq!(std::fs::read(&target).unwrap(), b"new");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let mode = std::fs::metadata(&target).unwrap().permissions().mode();
            assert_eq!(mode & 0o777, 0o644, "outputs are readable by others");
        }
    }

    #[test]
    fn a_set_of_files_appears_together() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("sim");
        write_files(&out, &["a.txt", "b.txt"], false, |tmp| {
            std::fs::write(tmp.join("a.txt"), b"a").unwrap();
            std::fs::write(tmp.join("b.txt"), b"b").unwrap();
            Ok(())
        })
        .unwrap();
        let mut names: Vec<_> = std::fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        names.sort();
        assert_eq!(names, ["a.txt", "b.txt"]);
        let again = write_files(&out, &["a.txt", "b.txt"], false, |_| Ok(()));
        assert!(matches!(again, Err(Error::OutputExists { .. })));
    }
}
