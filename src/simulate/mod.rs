//! Exact state-vector simulation of noisy runs, for examples and tests.
