//! Integration tests: one binary, one module per area, so the crate is linked once.

mod util;

mod assemble;
mod batch;
mod bounds_exact;
mod budget;
mod certificate_file;
mod certify;
mod data_statement;
mod device_errors;
mod hostile;
mod light_cone;
mod noise_record;
mod properties;
mod readme;
mod rehearsal;
mod report;
mod review;
mod run_file;
mod simulate;
mod snapshots;
mod sums;
mod windowed_noise;
