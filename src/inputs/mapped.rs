//! A read-only memory mapping of an input file, for hashing it without copying it.
//!
//! Reading a file through `read` copies every byte from the page cache into a buffer before
//! it is hashed: for a 256 MB run, about 0.1 s of CPU on the thread that computes the file's
//! SHA-256, as much as half the hashing itself. A mapping lets the hash read the page cache
//! in place.
//!
//! The one risk of a mapping: if another process truncates the file while it is mapped, a
//! read of a page past the new end raises `SIGBUS` instead of returning an error. The
//! `quassay` binary installs [`report_truncation_on_sigbus`], which then says what happened to
//! which file and exits with code 1 (a problem with an input); nothing is half-written,
//! because every output is linked into place only when complete (`outputs::atomic`). Callers
//! that cannot map a file (empty, a special file, mapping refused) read it instead.

use std::cell::Cell;
use std::fs::File;
use std::os::fd::AsRawFd;
use std::os::unix::ffi::OsStrExt;
use std::path::Path;

/// A read-only, private mapping of a whole file (at least one byte long).
pub struct Mapped {
    ptr: *mut libc::c_void,
    len: usize,
    /// The file's path, for the message if it is truncated while read.
    name: Vec<u8>,
}

thread_local! {
    /// The path of the file this thread is reading through [`Mapped::read_in_pieces`]
    /// (pointer and length; null when none), for the `SIGBUS` handler, which runs on the
    /// faulting thread. Constant-initialised and without a destructor, so reading it is a
    /// plain thread-local load, nothing the handler could not do.
    static READING: Cell<(*const u8, usize)> = const { Cell::new((std::ptr::null(), 0)) };
}

/// Clears [`READING`] when the read ends (or unwinds).
struct Reading;

impl Drop for Reading {
    fn drop(&mut self) {
        READING.with(|r| r.set((std::ptr::null(), 0)));
    }
}

// SAFETY: the mapping is read-only and owned; its bytes may be read from any thread.
unsafe impl Send for Mapped {}
// SAFETY: as above: shared access is reads only.
unsafe impl Sync for Mapped {}

impl Mapped {
    /// Maps `len` bytes of `file` (its size, from `fstat`; opened from `path`) read-only,
    /// with the kernel told the bytes will be read in order. `None` when `len` is zero or does
    /// not fit in memory addresses, or the kernel refuses; the caller then reads the file
    /// instead.
    pub fn map(file: &File, len: u64, path: &Path) -> Option<Mapped> {
        let len = usize::try_from(len).ok().filter(|&l| l > 0)?;
        // SAFETY: a fresh read-only private mapping of an open descriptor; nothing else
        // refers to the returned range, and failure is reported as MAP_FAILED.
        let ptr = unsafe {
            libc::mmap(
                std::ptr::null_mut(),
                len,
                libc::PROT_READ,
                libc::MAP_PRIVATE,
                file.as_raw_fd(),
                0,
            )
        };
        if ptr == libc::MAP_FAILED {
            return None;
        }
        // SAFETY: advice on a range this process just mapped; it changes no contents, and a
        // refusal only loses the read-ahead hint.
        unsafe {
            libc::madvise(ptr, len, libc::MADV_SEQUENTIAL);
        }
        Some(Mapped {
            ptr,
            len,
            name: path.as_os_str().as_bytes().to_vec(),
        })
    }

    /// The mapped bytes.
    pub fn bytes(&self) -> &[u8] {
        // SAFETY: `ptr` is a live read-only mapping of `len` bytes for the lifetime of `self`.
        // The file's contents can change under it (as they could between two reads); only a
        // truncation makes a read fault (see the module header).
        unsafe { std::slice::from_raw_parts(self.ptr.cast::<u8>(), self.len) }
    }

    /// Hands the bytes to `f` in order, `piece` bytes at a time (the last piece shorter), and
    /// unmaps from this process's page tables what has been read, every [`RELEASE_BYTES`]:
    /// the pages stay in the page cache, but they no longer count as this process's resident
    /// memory (a 4 GB run would otherwise show 4 GB resident).
    pub fn read_in_pieces(&self, piece: usize, f: impl FnMut(&[u8])) {
        self.read_releasing(piece, RELEASE_BYTES, f);
    }

    /// [`Mapped::read_in_pieces`] with the release interval `release` (a multiple of the
    /// page size).
    fn read_releasing(&self, piece: usize, release: usize, mut f: impl FnMut(&[u8])) {
        let bytes = self.bytes();
        READING.with(|r| r.set((self.name.as_ptr(), self.name.len())));
        let _reading = Reading;
        let mut released = 0;
        for (i, p) in bytes.chunks(piece.max(1)).enumerate() {
            f(p);
            let done = (i * piece.max(1) + p.len()) / release * release;
            if done > released {
                // SAFETY: the range lies inside this mapping and no slice of it is used
                // again here; a private read-only mapping re-reads the file if touched, so
                // no content is lost. Advice refused: the pages merely stay mapped.
                unsafe {
                    libc::madvise(
                        self.ptr.cast::<u8>().add(released).cast(),
                        done - released,
                        libc::MADV_DONTNEED,
                    );
                }
                released = done;
            }
        }
    }
}

/// Bytes read between two releases of [`Mapped::read_in_pieces`] (a multiple of the page
/// size): 8 MiB, so a mapped file adds at most that much to the resident memory.
pub const RELEASE_BYTES: usize = 8 << 20;

impl Drop for Mapped {
    fn drop(&mut self) {
        // SAFETY: the range was mapped by `map` and no slice of it outlives `self`.
        unsafe {
            libc::munmap(self.ptr, self.len);
        }
    }
}

/// The message of [`report_truncation_on_sigbus`]: these two pieces around the file's path in
/// quotes (or "an input file" where none is known).
const TRUNCATED: [&[u8]; 2] = [
    b"quassay: error: ",
    b" became shorter while it was being read (another program truncated or rewrote it); no \
partial output was left. Run the command again once the file is complete.\n",
];

/// Installs a `SIGBUS` handler that says an input file was truncated while mapped and exits
/// with code 1 (docs/robustness.md: a problem with an input). For the binary only; call it before any
/// other thread exists.
pub fn report_truncation_on_sigbus() {
    extern "C" fn on_sigbus(_: libc::c_int) {
        let (name, len) = READING.with(|r| r.get());
        let say = |bytes: &[u8]| {
            // SAFETY: write(2) is async-signal-safe; `bytes` is valid for its length.
            unsafe { libc::write(2, bytes.as_ptr().cast(), bytes.len()) };
        };
        say(TRUNCATED[0]);
        if name.is_null() {
            say(b"an input file");
        } else {
            say(b"'");
            // SAFETY: the path of the `Mapped` being read on this thread, alive while
            // `read_in_pieces` runs (it is cleared when that ends).
            say(unsafe { std::slice::from_raw_parts(name, len) });
            say(b"'");
        }
        say(TRUNCATED[1]);
        // SAFETY: _exit(2) is async-signal-safe.
        unsafe { libc::_exit(1) };
    }
    // SAFETY: a zeroed sigaction with a handler and an empty mask is a valid argument; the
    // handler only calls async-signal-safe functions.
    unsafe {
        let mut action: libc::sigaction = std::mem::zeroed();
        action.sa_sigaction = on_sigbus as extern "C" fn(libc::c_int) as libc::sighandler_t;
        libc::sigemptyset(&mut action.sa_mask);
        libc::sigaction(libc::SIGBUS, &action, std::ptr::null_mut());
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    /// A file truncated under its mapping: the read faults, and the handler ends the process
    /// with exit code 1 and the message on stderr (in a forked child, which does nothing but
    /// system calls between the fork and its exit; its stderr is a pipe read here).
    #[test]
    fn a_truncated_mapping_exits_with_code_one() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("t.bin");
        File::create(&path)
            .unwrap()
            .write_all(&[7u8; 65_536])
            .unwrap();
        let file = std::fs::OpenOptions::new()
            .read(true)
            .write(true)
            .open(&path)
            .unwrap();
        let mut pipe = [0; 2];
        // SAFETY (test): pipe, fork, dup2, ftruncate, waitpid, read and _exit are system
        // calls on descriptors of this test.
        assert_eq!(unsafe { libc::pipe(pipe.as_mut_ptr()) }, 0);
        let pid = unsafe { libc::fork() };
        assert!(pid >= 0);
        if pid == 0 {
            unsafe { libc::dup2(pipe[1], 2) };
            report_truncation_on_sigbus();
            let code = match Mapped::map(&file, 65_536, &path) {
                Some(m) => {
                    unsafe { libc::ftruncate(file.as_raw_fd(), 0) };
                    // A read past the new end faults: the handler exits with 1.
                    let mut byte = 0;
                    m.read_in_pieces(65_536, |p| {
                        byte = unsafe { std::ptr::read_volatile(&p[40_000]) };
                    });
                    10 + i32::from(byte)
                }
                None => 20,
            };
            unsafe { libc::_exit(code) };
        }
        unsafe { libc::close(pipe[1]) };
        let mut status = 0;
        assert_eq!(unsafe { libc::waitpid(pid, &mut status, 0) }, pid);
        let mut said = vec![0u8; 4096];
        let n = unsafe { libc::read(pipe[0], said.as_mut_ptr().cast(), said.len()) };
        unsafe { libc::close(pipe[0]) };
        said.truncate(usize::try_from(n).unwrap_or(0));
        assert!(libc::WIFEXITED(status), "the child did not exit: {status}");
        assert_eq!(libc::WEXITSTATUS(status), 1);
        let mut want = TRUNCATED[0].to_vec();
        want.extend_from_slice(format!("'{}'", path.display()).as_bytes());
        want.extend_from_slice(TRUNCATED[1]);
        assert_eq!(
            String::from_utf8_lossy(&said),
            String::from_utf8_lossy(&want)
        );
        assert!(String::from_utf8_lossy(&said).contains("became shorter"));
    }

    /// The mapping holds the file's bytes, and an empty file is not mapped.
    #[test]
    fn a_mapping_reads_the_files_bytes() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("f.bin");
        let bytes: Vec<u8> = (0..300_000u32).map(|i| (i * 7 % 251) as u8).collect();
        File::create(&path).unwrap().write_all(&bytes).unwrap();
        let file = File::open(&path).unwrap();
        let m = Mapped::map(&file, bytes.len() as u64, &path).unwrap();
        assert_eq!(m.bytes(), &bytes[..]);
        let mut pieces = Vec::new();
        m.read_in_pieces(65_536, |p| pieces.extend_from_slice(p));
        assert_eq!(pieces, bytes);
        // Released pages (every 16 KiB here) are read again from the file when touched.
        pieces.clear();
        m.read_releasing(5000, 16_384, |p| pieces.extend_from_slice(p));
        assert_eq!(pieces, bytes);
        assert_eq!(m.bytes(), &bytes[..]);
        let empty = dir.path().join("e.bin");
        File::create(&empty).unwrap();
        assert!(Mapped::map(&File::open(&empty).unwrap(), 0, &empty).is_none());
    }
}
