//! Fuzz target `scenario`: arbitrary UTF-8 text through the simulation-scenario reader.
//!
//! `parse_scenario` must return a scenario or problems, never panic, loop or exhaust memory
//! (the size limits of docs/scenario.md are checked before anything is allocated by size).
//! Bytes that are not UTF-8 never reach the parser (`read_scenario` rejects them first).

#![no_main]

use libfuzzer_sys::fuzz_target;
use quassay::inputs::scenario::parse_scenario;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        if let Err(problems) = parse_scenario(text) {
            assert!(!problems.is_empty(), "an error without a problem");
            for p in &problems {
                assert!(!p.path.is_empty() && !p.message.is_empty(), "{p:?}");
            }
        }
    }
});
