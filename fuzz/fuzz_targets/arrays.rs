//! Fuzz target `arrays`: arbitrary bytes through the readers of `quassay assemble`.
//!
//! The bytes are written to one scratch `.npy` file per process and read with
//! `inputs::arrays::npy::read_floats` and `read_ints` (ndarray-npy behind the header check that
//! refuses a header claiming more than the file holds), and the same file as a `.npz`
//! archive. If the bytes are JSON they also go to `assemble_from_value` as an array
//! description whose arrays are found in the scratch folder. Every call must return arrays or
//! problems, never panic, hang or allocate by a header's claim. Descriptions naming files
//! under /proc, /sys or /dev are skipped (a real path there is not what is being tested).

#![no_main]

use std::path::PathBuf;
use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;
use quassay::inputs::arrays::assemble_from_value;
use quassay::inputs::arrays::npy::{read_floats, read_ints, ArraySource};

fn scratch() -> &'static PathBuf {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let dir = std::env::temp_dir().join(format!("quassay-fuzz-arrays-{}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("scratch folder");
        dir
    })
}

fuzz_target!(|data: &[u8]| {
    let dir = scratch();
    let npy = dir.join("a.npy");
    std::fs::write(&npy, data).expect("scratch file");
    let _ = read_floats(&ArraySource::Npy(npy.clone()));
    let _ = read_ints(&ArraySource::Npy(npy.clone()));
    let _ = read_floats(&ArraySource::Npz {
        file: npy,
        array: "a".into(),
    });
    let text = String::from_utf8_lossy(data);
    if ["/proc", "/sys", "/dev"].iter().any(|p| text.contains(p)) {
        return;
    }
    if let Ok(v) = serde_json::from_slice::<serde_json::Value>(data) {
        if let Err(problems) = assemble_from_value(&v, dir) {
            assert!(!problems.is_empty(), "an error without a problem");
            for p in &problems {
                assert!(!p.path.is_empty() && !p.message.is_empty(), "{p:?}");
            }
        }
    }
});
