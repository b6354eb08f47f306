//! Consistency of the data with the noise record (bounds.md §6).
