//! Writer for run files (HDF5, layout `quassay-run` v1).
