//! Reader for simulation scenarios (JSON, format `quassay-scenario` v1).
