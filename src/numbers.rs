//! The JSON form of a computed number, shared by the consistency checks and the certificate.
//!
//! Why a module of its own: both `checks` (its report) and `certificate` (the body) write
//! numbers that may be infinite or NaN, and the checks sit below the certificate, so the helper
//! lives below both. A finite number is a JSON number; an infinite one (a worst case with an
//! unbounded family, say) is the string `"unbounded"`; NaN is `"undefined"`. Beside it, the
//! short form of a number printed for people (summary tables, `review`).

use serde_json::Value;

/// A number for people: four decimals with trailing zeros dropped between 10⁻³ and 10⁴, else
/// four significant digits in exponent form; `unbounded` for infinity, `-` for NaN. Full
/// precision stays in the certificate and in `--json` output.
pub fn short(x: f64) -> String {
    if x.is_infinite() {
        "unbounded".into()
    } else if x.is_nan() {
        "-".into()
    } else if x == 0.0 {
        "0".into()
    } else if (1e-3..1e4).contains(&x.abs()) {
        format!("{:.4}", x)
            .trim_end_matches('0')
            .trim_end_matches('.')
            .to_string()
    } else {
        format!("{x:.3e}")
    }
}

/// A finite number as a JSON number; an infinite one as `"unbounded"`; NaN as `"undefined"`.
pub fn num(x: f64) -> Value {
    match serde_json::Number::from_f64(x) {
        Some(n) => Value::Number(n),
        None if x.is_nan() => Value::String("undefined".into()),
        None => Value::String("unbounded".into()),
    }
}
