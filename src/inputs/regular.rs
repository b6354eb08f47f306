//! Every input must be a regular file: this is checked before its content is read.
//!
//! Opening a FIFO (named pipe) for reading blocks until some other process opens it for
//! writing, and reading a character device (`/dev/zero`, a terminal) may never end, so a
//! reader that simply opened what it was given could hang forever on a wrong path. The file is
//! therefore opened with `O_NONBLOCK` (which returns at once for a FIFO and does nothing for a
//! regular file), its type is taken from the open descriptor (`fstat`, so the check and the
//! read concern the same file), and anything but a regular file is refused with a message that
//! says what it is and what to give instead.
//!
//! HDF5 opens run files by path itself; for those [`check_regular`] is called just before,
//! which leaves a window in which the path could be replaced (a FIFO swapped in between the
//! check and HDF5's open). That needs a deliberate race, not a wrong path.

use std::fs::File;
use std::io::Read;
use std::path::Path;

use crate::error::{Error, Result};

/// What kind of file system object `meta` describes, in words for a message.
fn kind_of(meta: &std::fs::Metadata) -> &'static str {
    let t = meta.file_type();
    if t.is_dir() {
        return "a folder";
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if t.is_fifo() {
            return "a FIFO (named pipe)";
        }
        if t.is_socket() {
            return "a socket";
        }
        if t.is_char_device() {
            return "a character device";
        }
        if t.is_block_device() {
            return "a block device";
        }
    }
    "not a regular file"
}

/// The error for an input at `path` that is `what` (a folder, a FIFO, ...) instead of a file;
/// `wanted` names the kind of file expected, e.g. `a run file (HDF5, layout quassay-run v1)`.
fn not_regular(path: &Path, what: &str, wanted: &str) -> Error {
    let kind = if what == "a folder" {
        std::io::ErrorKind::IsADirectory
    } else {
        std::io::ErrorKind::InvalidInput
    };
    Error::Read {
        path: path.to_path_buf(),
        source: std::io::Error::new(
            kind,
            format!("it is {what}, not a regular file; give the path of {wanted}"),
        ),
    }
}

/// Opens `path` for reading, refusing anything but a regular file without blocking on it.
/// `wanted` names the expected kind of file for the message.
pub fn open_regular(path: &Path, wanted: &str) -> Result<File> {
    let read_err = |source: std::io::Error| Error::Read {
        path: path.to_path_buf(),
        source,
    };
    let mut options = std::fs::OpenOptions::new();
    options.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        options.custom_flags(libc::O_NONBLOCK);
    }
    // A folder opens read-only on Unix; its type is then seen below, like any other.
    let file = options.open(path).map_err(read_err)?;
    let meta = file.metadata().map_err(read_err)?;
    if !meta.is_file() {
        return Err(not_regular(path, kind_of(&meta), wanted));
    }
    Ok(file)
}

/// Checks that `path` is a regular file that can be opened for reading; returns its size.
pub fn check_regular(path: &Path, wanted: &str) -> Result<u64> {
    let file = open_regular(path, wanted)?;
    file.metadata()
        .map(|m| m.len())
        .map_err(|source| Error::Read {
            path: path.to_path_buf(),
            source,
        })
}

/// Reads the whole of the regular file `path` (see [`open_regular`]).
pub fn read_regular(path: &Path, wanted: &str) -> Result<Vec<u8>> {
    let mut file = open_regular(path, wanted)?;
    let mut bytes = Vec::new();
    file.read_to_end(&mut bytes).map_err(|source| Error::Read {
        path: path.to_path_buf(),
        source,
    })?;
    Ok(bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_regular_file_is_read_and_a_folder_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let f = dir.path().join("a.json");
        std::fs::write(&f, b"{}").unwrap();
        assert_eq!(read_regular(&f, "a record").unwrap(), b"{}");
        assert_eq!(check_regular(&f, "a record").unwrap(), 2);
        let e = read_regular(dir.path(), "a record")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("it is a folder") && e.contains("a record"),
            "{e}"
        );
    }

    #[cfg(unix)]
    #[test]
    fn a_fifo_is_refused_without_blocking() {
        let dir = tempfile::tempdir().unwrap();
        let fifo = dir.path().join("pipe");
        let c = std::ffi::CString::new(fifo.to_str().unwrap()).unwrap();
        // SAFETY: a valid NUL-terminated path; mkfifo only creates the node.
        assert_eq!(unsafe { libc::mkfifo(c.as_ptr(), 0o600) }, 0);
        // Without O_NONBLOCK this open would wait for a writer forever.
        let e = read_regular(&fifo, "a record").unwrap_err().to_string();
        assert!(e.contains("FIFO"), "{e}");
        let dev = read_regular(Path::new("/dev/null"), "a record").unwrap_err();
        assert!(dev.to_string().contains("character device"), "{dev}");
    }
}
