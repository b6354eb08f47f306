//! Integration tests for simulate.
