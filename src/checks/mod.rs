//! Consistency of the data with the noise record (docs/checks.md).
//!
//! A certificate is only as good as the record behind it, and the data can contradict the
//! record: the spread between realizations cannot exceed what the recorded noise and the shot
//! noise allow, nothing varies at t = 0 except shot noise, and a known ideal reference must lie
//! inside the certified interval. This module tests all three and reports the verdict.
//!
//! * [`chi_square`]: the χ² survival function and quantiles (incomplete gamma);
//! * [`columns`]: per-time sums of one observable's R × T arrays, read row by row;
//! * [`holm`]: Holm's step-down correction of many p-values;
//! * [`ideal`]: the ideal-reference half-width as a cheap function of ε, and its p-value;
//! * [`variance`]: the sample variance and the variance the record allows (Efron–Stein for the
//!   noise, Bhatia–Davis for the shots);
//! * [`maurer_pontil`]: the distribution-free confidence bound on a standard deviation;
//! * [`report`]: the whole check of a run, its verdict and its JSON.
//!
//! The statistics, their assumptions and the decision rule are documented in `docs/checks.md`.

pub mod chi_square;
pub mod columns;
pub mod holm;
pub mod ideal;
pub mod maurer_pontil;
pub mod report;
pub mod variance;

pub use report::{check_run, ChecksReport, Failure};
