//! Integration tests: one binary, one module per area (ripgrep's layout).

mod util;

mod bounds_exact;
mod budget;
mod certify;
mod light_cone;
mod noise_record;
mod rehearsal;
mod report;
mod review;
mod run_file;
mod simulate;
mod sums;
