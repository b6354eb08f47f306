//! The bounds of `docs/method.md`: pure functions, no I/O.
