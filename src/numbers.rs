//! The JSON form of a computed number, shared by the consistency checks and the certificate.
//!
//! Why a module of its own: both `checks` (its report) and `certificate` (the body) write
//! numbers that may be infinite or NaN, and the checks sit below the certificate, so the helper
//! lives below both. A finite number is a JSON number; an infinite one (a worst case with an
//! unbounded family, say) is the string `"unbounded"`; NaN is `"undefined"`.

use serde_json::Value;

/// A finite number as a JSON number; an infinite one as `"unbounded"`; NaN as `"undefined"`.
pub fn num(x: f64) -> Value {
    match serde_json::Number::from_f64(x) {
        Some(n) => Value::Number(n),
        None if x.is_nan() => Value::String("undefined".into()),
        None => Value::String("unbounded".into()),
    }
}
