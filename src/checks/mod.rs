//! Consistency of the data with the noise record (bounds.md §6).

pub mod chi_square;
pub mod holm;
pub mod maurer_pontil;
pub mod variance;
