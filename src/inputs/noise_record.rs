//! Reader for noise records (JSON, format `quassay-noise` v1).
