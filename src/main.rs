//! The `quassay` binary: parses the command line and hands over to [`quassay::cli`].

fn main() -> std::process::ExitCode {
    keep_freed_memory();
    // Run files are hashed from a memory mapping: a file truncated meanwhile by another
    // program must end with a message and exit code 1, not a crash.
    quassay::inputs::mapped::report_truncation_on_sigbus();
    quassay::cli::main()
}

/// glibc returns freed memory at the top of the heap to the kernel once more than 128 KiB is
/// free there, and serves blocks above a (dynamic) threshold by `mmap`: a run is read in
/// blocks of about 1 MiB, freed on the hashing thread, so every block came back as fresh
/// zeroed pages, faulted in one by one (a third of the CPU time of a 4 GB certify went to the
/// kernel). Keeping up to 256 MiB of freed memory, and serving blocks below 32 MiB (glibc's
/// largest threshold on 64-bit) from the heap, reuses it instead. Nothing else changes.
fn keep_freed_memory() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: mallopt only sets allocator parameters; it is called before any other thread
    // exists, and a refused value (return 0) leaves glibc's defaults in place.
    unsafe {
        libc::mallopt(libc::M_MMAP_THRESHOLD, 32 << 20);
        libc::mallopt(libc::M_TRIM_THRESHOLD, 256 << 20);
    }
}
