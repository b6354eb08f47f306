//! Integration tests: one binary, one module per area (ripgrep's layout).

mod util;

mod certify;
mod noise_record;
mod run_file;
mod simulate;
