//! Integration tests for noise_record.
