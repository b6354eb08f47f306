//! Integration tests: one binary, one module per area (ripgrep's layout).

mod util;

mod bounds_exact;
mod certify;
mod light_cone;
mod noise_record;
mod rehearsal;
mod report;
mod run_file;
mod simulate;
