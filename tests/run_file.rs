//! Integration tests for run_file.
