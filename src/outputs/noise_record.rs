//! Writer for noise records (JSON, format `quassay-noise` v1), deterministic and pretty-printed.
