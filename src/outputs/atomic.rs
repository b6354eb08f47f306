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
/// libraries such as HDF5 can create it themselves), which appears at `path` only if `write`
/// succeeds. Without `force`, an existing `path` is an error and is left untouched.
///
/// On Linux the temporary file is unnamed (`O_TMPFILE` in the target's folder): `write` gets
/// its `/proc/self/fd/N` path, the file is synced and then linked into place with `linkat`.
/// A process killed at any moment before the link leaves nothing behind, since an unnamed file
/// vanishes with its last descriptor. Where the kernel, the file system or `/proc` do not allow
/// this, a named temporary `.quassay-*.part` is used instead, which a SIGKILL can leave behind.
///
/// `write` must open the path it is given as it stands (`std::fs::File::create` does). HDF5
/// does not: it resolves the path with `realpath`, which fails for an unnamed file (HDF5 1.10:
/// "can't retrieve real path for file"), so HDF5 outputs go through [`write_file_named`].
pub fn write_file(path: &Path, force: bool, write: impl FnOnce(&Path) -> Result<()>) -> Result<()> {
    check_free(path, force)?;
    let dir = parent_of(path);
    #[cfg(target_os = "linux")]
    let write = match unnamed::create(dir) {
        Ok(Some(tmp)) => return unnamed::finish(tmp, path, force, write),
        Ok(None) => write,
        Err(e) => {
            return Err(Error::Write {
                path: path.to_path_buf(),
                message: format!("cannot create a temporary file in '{}': {e}", dir.display()),
            })
        }
    };
    write_named(path, force, dir, write)
}

/// [`write_file`] through a named temporary file `.quassay-*.part` beside `path`, renamed into
/// place: for writers that need a real name (HDF5). A failure removes the temporary file; a
/// SIGKILL while `write` runs leaves it behind (a hidden `.quassay-*.part`, never `path`).
pub fn write_file_named(
    path: &Path,
    force: bool,
    write: impl FnOnce(&Path) -> Result<()>,
) -> Result<()> {
    check_free(path, force)?;
    write_named(path, force, parent_of(path), write)
}

/// [`write_file_named`] once the target is known to be free.
fn write_named(
    path: &Path,
    force: bool,
    dir: &Path,
    write: impl FnOnce(&Path) -> Result<()>,
) -> Result<()> {
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

/// Unnamed temporary files (Linux `O_TMPFILE`), linked into place once complete.
#[cfg(target_os = "linux")]
mod unnamed {
    use std::ffi::CString;
    use std::fs::File;
    use std::os::fd::FromRawFd;
    use std::os::unix::ffi::OsStrExt;
    use std::path::{Path, PathBuf};

    use crate::error::{Error, Result};

    /// An open unnamed file in `dir`, and the path by which a library can open it again.
    pub(super) struct Unnamed {
        file: File,
        dir: PathBuf,
        proc_path: PathBuf,
    }

    fn c_path(p: &Path) -> std::io::Result<CString> {
        CString::new(p.as_os_str().as_bytes())
            .map_err(|_| std::io::Error::new(std::io::ErrorKind::InvalidInput, "NUL in a path"))
    }

    /// Creates an unnamed file in `dir`; `Ok(None)` where that is not supported (old kernel,
    /// a file system without `O_TMPFILE`, no `/proc`), so the caller falls back to a named one.
    pub(super) fn create(dir: &Path) -> std::io::Result<Option<Unnamed>> {
        let c = c_path(dir)?;
        // SAFETY: a valid NUL-terminated path; the returned descriptor is owned below.
        let fd = unsafe {
            libc::open(
                c.as_ptr(),
                libc::O_TMPFILE | libc::O_RDWR | libc::O_CLOEXEC,
                0o600 as libc::c_uint,
            )
        };
        if fd < 0 {
            let e = std::io::Error::last_os_error();
            return match e.raw_os_error() {
                // Not supported by the kernel (EISDIR: O_TMPFILE unknown, read as O_DIRECTORY)
                // or by the file system (EOPNOTSUPP, EINVAL).
                Some(libc::EOPNOTSUPP | libc::EISDIR | libc::EINVAL) => Ok(None),
                _ => Err(e),
            };
        }
        // SAFETY: `fd` is a fresh descriptor that nothing else owns.
        let file = unsafe { File::from_raw_fd(fd) };
        let proc_path = PathBuf::from(format!("/proc/self/fd/{fd}"));
        if std::fs::symlink_metadata(&proc_path).is_err() {
            return Ok(None);
        }
        Ok(Some(Unnamed {
            file,
            dir: dir.to_path_buf(),
            proc_path,
        }))
    }

    fn write_err(path: &Path, what: &str, e: std::io::Error) -> Error {
        Error::Write {
            path: path.to_path_buf(),
            message: format!("{what}: {e}"),
        }
    }

    /// `linkat(AT_FDCWD, /proc/self/fd/N, AT_FDCWD, to, AT_SYMLINK_FOLLOW)`: gives the unnamed
    /// file the name `to`; fails with `EEXIST` if `to` exists (never replaces it).
    fn link(tmp: &Unnamed, to: &Path) -> std::io::Result<()> {
        let from = c_path(&tmp.proc_path)?;
        let to = c_path(to)?;
        // SAFETY: two valid NUL-terminated paths.
        let r = unsafe {
            libc::linkat(
                libc::AT_FDCWD,
                from.as_ptr(),
                libc::AT_FDCWD,
                to.as_ptr(),
                libc::AT_SYMLINK_FOLLOW,
            )
        };
        if r == 0 {
            Ok(())
        } else {
            Err(std::io::Error::last_os_error())
        }
    }

    /// Runs `write` on the unnamed file, syncs it and gives it its name `path`.
    pub(super) fn finish(
        tmp: Unnamed,
        path: &Path,
        force: bool,
        write: impl FnOnce(&Path) -> Result<()>,
    ) -> Result<()> {
        // On failure the descriptor is closed and the unnamed file vanishes with it.
        write(&tmp.proc_path)?;
        use std::os::unix::fs::PermissionsExt;
        tmp.file
            .set_permissions(std::fs::Permissions::from_mode(0o644))
            .map_err(|e| write_err(path, "cannot set the permissions", e))?;
        tmp.file
            .sync_all()
            .map_err(|e| write_err(path, "cannot flush the file to disk", e))?;
        if !force {
            link(&tmp, path).map_err(|e| {
                if e.kind() == std::io::ErrorKind::AlreadyExists {
                    Error::OutputExists {
                        path: path.to_path_buf(),
                    }
                } else {
                    write_err(path, "cannot link the finished file into place", e)
                }
            })?;
        } else {
            // linkat cannot replace a file. The finished file gets a fresh hidden name, which
            // is then renamed over the target (atomic). A SIGKILL between the two system calls
            // (microseconds) leaves that hidden `.quassay-*.part` behind: the one window left.
            let hidden = hidden_name(&tmp).map_err(|e| {
                write_err(path, "cannot link the finished file beside the target", e)
            })?;
            if let Err(e) = std::fs::rename(&hidden, path) {
                let _ = std::fs::remove_file(&hidden);
                return Err(write_err(
                    path,
                    "cannot rename the finished file into place",
                    e,
                ));
            }
        }
        sync_dir(&tmp.dir);
        Ok(())
    }

    /// Links `tmp` to a new hidden name in its folder (retrying on a name clash).
    fn hidden_name(tmp: &Unnamed) -> std::io::Result<PathBuf> {
        let mut last = None;
        for _ in 0..16 {
            let name = format!(".quassay-{:016x}.part", rand::random::<u64>());
            let hidden = tmp.dir.join(name);
            match link(tmp, &hidden) {
                Ok(()) => return Ok(hidden),
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => last = Some(e),
                Err(e) => return Err(e),
            }
        }
        Err(last.unwrap_or_else(|| std::io::Error::other("no free temporary name")))
    }

    /// Makes the new directory entry durable (best effort: some file systems refuse it).
    fn sync_dir(dir: &Path) {
        if let Ok(d) = File::open(dir) {
            let _ = d.sync_all();
        }
    }
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

    /// While `write` runs, the folder has no entry at all: the temporary file is unnamed, so a
    /// process killed at that moment leaves nothing (Linux, on a file system with O_TMPFILE).
    #[cfg(target_os = "linux")]
    #[test]
    fn the_temporary_file_has_no_name_while_it_is_written() {
        let dir = tempfile::tempdir().unwrap();
        if unnamed::create(dir.path()).unwrap().is_none() {
            return; // this file system has no O_TMPFILE: the named fallback is used
        }
        for force in [false, true] {
            let target = dir.path().join("out.json");
            write_file(&target, force, |tmp| {
                assert!(tmp.starts_with("/proc/self/fd"), "{}", tmp.display());
                std::fs::write(tmp, b"whole").unwrap();
                let seen: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
                assert_eq!(seen.len(), usize::from(force), "only the old file, if any");
                Ok(())
            })
            .unwrap();
            assert_eq!(std::fs::read(&target).unwrap(), b"whole");
            assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
        }
    }

    /// HDF5 creates its file by a path it resolves first: through [`write_file_named`] the
    /// result reads back as the run that was written; through [`write_file`] (an unnamed file
    /// on Linux) HDF5 refuses the path, and the failure leaves nothing behind.
    #[test]
    fn an_hdf5_file_is_written_through_a_named_temporary() {
        use crate::outputs::run_file::{write_run, WriteOptions};
        let dir = tempfile::tempdir().unwrap();
        let run = crate::inputs::run_file::read_run(
            &Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/h5py/run_f32_gzip.h5"),
        )
        .unwrap();
        let target = dir.path().join("copy.h5");
        #[cfg(target_os = "linux")]
        if unnamed::create(dir.path()).unwrap().is_some() {
            let r = write_file(&target, false, |tmp| {
                write_run(tmp, &run, &WriteOptions::default())
            });
            assert!(
                r.is_err(),
                "HDF5 accepted an unnamed file: write_file could serve it"
            );
            assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
        }
        write_file_named(&target, false, |tmp| {
            write_run(tmp, &run, &WriteOptions::default())
        })
        .unwrap();
        let back = crate::inputs::run_file::read_run(&target).unwrap();
        assert_eq!(back.observables, run.observables);
        assert_eq!(back.times, run.times);
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
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
