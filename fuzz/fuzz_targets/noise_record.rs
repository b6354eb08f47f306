//! Fuzz target `noise_record`: arbitrary bytes through the noise-record reader.
//!
//! UTF-8 input goes to `parse_noise_record` (the text entry point). Input that is not UTF-8
//! goes through `read_noise_record`, the only entry point that takes bytes (it reads a file),
//! via one scratch file per process, so the reader's own handling of bad bytes is exercised.
//! Either way the reader must return a record or problems, never panic; a problem always has
//! a path and a message.

#![no_main]

use libfuzzer_sys::fuzz_target;
use quassay::inputs::noise_record::{parse_noise_record, read_noise_record};

fuzz_target!(|data: &[u8]| {
    match std::str::from_utf8(data) {
        Ok(text) => {
            if let Err(problems) = parse_noise_record(text) {
                assert!(!problems.is_empty(), "an error without a problem");
                for p in &problems {
                    assert!(!p.path.is_empty() && !p.message.is_empty(), "{p:?}");
                }
            }
        }
        Err(_) => {
            let path = std::env::temp_dir()
                .join(format!("quassay-fuzz-noise-{}.json", std::process::id()));
            if std::fs::write(&path, data).is_ok() {
                // Not UTF-8: must be an input error, never a record.
                assert!(read_noise_record(&path).is_err());
                let _ = std::fs::remove_file(&path);
            }
        }
    }
});
