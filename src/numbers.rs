//! The JSON form of a computed number, shared by the consistency checks and the certificate.
//!
//! Why a module of its own: both `checks` (its report) and `certificate` (the body) write
//! numbers that may be infinite or NaN, and the checks sit below the certificate, so the helper
//! lives below both. A finite number is a JSON number; an infinite one (a worst case with an
//! unbounded family, say) is the string `"unbounded"`; NaN is `"undefined"`. Beside it, the
//! short form of a number printed for people (summary tables, `review`).

use serde_json::Value;

/// A number for people: four significant digits, trailing zeros dropped, between 10⁻³ and 10⁴
/// (0.02162, 6.635, 1235), else four significant digits in exponent form (3.063e-4);
/// `unbounded` for infinity, `-` for NaN. Full precision stays in the certificate and in
/// `--json` output.
pub fn short(x: f64) -> String {
    if x.is_infinite() {
        "unbounded".into()
    } else if x.is_nan() {
        "-".into()
    } else if x == 0.0 {
        "0".into()
    } else if (1e-3..1e4).contains(&x.abs()) {
        // 10^digits ≤ |x| < 10^(digits+1), digits in -3..=3: 3 − digits decimals leave four
        // significant digits.
        let digits = x.abs().log10().floor() as i32;
        let decimals = (3 - digits).clamp(0, 6) as usize;
        let text = format!("{x:.decimals$}");
        if text.contains('.') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        }
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

#[cfg(test)]
mod tests {
    use super::short;

    #[test]
    fn numbers_for_people_have_four_significant_digits() {
        for (x, text) in [
            (0.050000000000000044, "0.05"),
            (0.025000000000000022, "0.025"),
            (0.7319504711246749, "0.732"),
            (6.63536, "6.635"),
            (0.00123456, "0.001235"),
            (1234.6, "1235"),
            (1000.0, "1000"),
            (9.99996, "10"),
            (-0.1180194308784786, "-0.118"),
            (3.0633e-4, "3.063e-4"),
            (25700.0, "2.570e4"),
            (2004041236836073500.0, "2.004e18"),
            (f64::INFINITY, "unbounded"),
            (0.0, "0"),
        ] {
            assert_eq!(short(x), text, "{x}");
        }
    }
}
