//! Canonical JSON per RFC 8785 (JSON Canonicalization Scheme), for the certificate's body.
//!
//! The body's SHA-256 is its digest, so the bytes must be the same on every machine: object
//! members sorted by the UTF-16 code units of their names, no whitespace, strings escaped as
//! ECMAScript's `JSON.stringify` does, and numbers written as ECMAScript's
//! `Number.prototype.toString` writes IEEE 754 doubles (RFC 8785 §3.2.2.3).
//!
//! Numbers: Rust's `{:e}` formatting gives the number of digits of the shortest string that
//! round-trips; the digits themselves are then taken from Rust's exact formatting at that
//! precision (nearest, ties to even), which is ECMAScript's choice among candidates of that
//! length. The layout (plain or exponent form, `e+`/`e-`) is ECMAScript's and done here.
//! serde_json integers are converted to the nearest double first, as RFC 8785 §3.2.2.3 says
//! (integers beyond 2^53 lose precision there, by design of the scheme).

use std::fmt::Write;

use serde_json::Value;

/// Why a value has no canonical form.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum CanonicalError {
    /// NaN and infinities have no JSON form (RFC 8785 §3.2.2.3).
    #[error(
        "the number at '{pointer}' is not finite; JSON (RFC 8785) has no form for NaN or infinity"
    )]
    NonFinite { pointer: String },
}

/// The RFC 8785 canonical form of `v`.
pub fn to_canonical_json(v: &Value) -> Result<String, CanonicalError> {
    let mut out = String::new();
    write_value(v, &mut out, &mut String::new())?;
    Ok(out)
}

/// The UTF-8 bytes of the canonical form (what is hashed).
pub fn to_canonical_bytes(v: &Value) -> Result<Vec<u8>, CanonicalError> {
    to_canonical_json(v).map(String::into_bytes)
}

fn write_value(v: &Value, out: &mut String, pointer: &mut String) -> Result<(), CanonicalError> {
    match v {
        Value::Null => out.push_str("null"),
        Value::Bool(true) => out.push_str("true"),
        Value::Bool(false) => out.push_str("false"),
        Value::Number(n) => {
            let x = if let Some(u) = n.as_u64() {
                u as f64 // round to nearest, ties to even (Rust `as` semantics)
            } else if let Some(i) = n.as_i64() {
                i as f64
            } else {
                n.as_f64().unwrap_or(f64::NAN)
            };
            match number_to_string(x) {
                Some(text) => out.push_str(&text),
                None => {
                    return Err(CanonicalError::NonFinite {
                        pointer: pointer.clone(),
                    })
                }
            }
        }
        Value::String(s) => write_string(s, out),
        Value::Array(items) => {
            out.push('[');
            for (i, item) in items.iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                let len = pointer.len();
                let _ = write!(pointer, "/{i}");
                write_value(item, out, pointer)?;
                pointer.truncate(len);
            }
            out.push(']');
        }
        Value::Object(map) => {
            let mut members: Vec<(Vec<u16>, &String, &Value)> = map
                .iter()
                .map(|(k, v)| (k.encode_utf16().collect(), k, v))
                .collect();
            members.sort_by(|a, b| a.0.cmp(&b.0));
            out.push('{');
            for (i, (_, k, v)) in members.into_iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                write_string(k, out);
                out.push(':');
                let len = pointer.len();
                pointer.push('/');
                pointer.push_str(&k.replace('~', "~0").replace('/', "~1"));
                write_value(v, out, pointer)?;
                pointer.truncate(len);
            }
            out.push('}');
        }
    }
    Ok(())
}

/// A string as `JSON.stringify` writes it (RFC 8785 §3.2.2.2).
fn write_string(s: &str, out: &mut String) {
    out.push('"');
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\u{08}' => out.push_str("\\b"),
            '\u{09}' => out.push_str("\\t"),
            '\u{0A}' => out.push_str("\\n"),
            '\u{0C}' => out.push_str("\\f"),
            '\u{0D}' => out.push_str("\\r"),
            c if (c as u32) < 0x20 => {
                let _ = write!(out, "\\u{:04x}", c as u32);
            }
            c => out.push(c),
        }
    }
    out.push('"');
}

/// A finite double as ECMAScript's `Number.prototype.toString` writes it; `None` if not
/// finite.
pub fn number_to_string(x: f64) -> Option<String> {
    if !x.is_finite() {
        return None;
    }
    let mut out = String::new();
    if x == 0.0 {
        out.push('0'); // also −0 (RFC 8785 §3.2.2.3)
        return Some(out);
    }
    if x < 0.0 {
        out.push('-');
    }
    // Shortest round-trip digit count k from `{:e}`; then the k-digit decimal nearest to x,
    // ties to even, from Rust's exact formatting (ECMAScript's rule for choosing among
    // k-digit candidates; `{:e}` alone may pick the other one of a tie, as for
    // 1424953923781206.25 → …206.2, RFC 8785 Appendix B). The nearest k-digit decimal round-
    // trips because the shortest one does and the round-trip interval contains x.
    let shortest = format!("{:e}", x.abs());
    let k = shortest
        .split_once('e')?
        .0
        .chars()
        .filter(|c| *c != '.')
        .count();
    let sci = format!("{:.*e}", k - 1, x.abs());
    let (mantissa, exp) = sci.split_once('e')?;
    let digits: String = mantissa.chars().filter(|c| *c != '.').collect();
    let k = digits.len() as i32;
    let n = exp.parse::<i32>().ok()? + 1;
    if k <= n && n <= 21 {
        out.push_str(&digits);
        out.extend(std::iter::repeat_n('0', (n - k) as usize));
    } else if 0 < n && n <= 21 {
        out.push_str(&digits[..n as usize]);
        out.push('.');
        out.push_str(&digits[n as usize..]);
    } else if -6 < n && n <= 0 {
        out.push_str("0.");
        out.extend(std::iter::repeat_n('0', (-n) as usize));
        out.push_str(&digits);
    } else {
        out.push_str(&digits[..1]);
        if k > 1 {
            out.push('.');
            out.push_str(&digits[1..]);
        }
        let e = n - 1;
        let _ = write!(out, "e{}{}", if e < 0 { '-' } else { '+' }, e.abs());
    }
    Some(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn num(x: f64) -> String {
        number_to_string(x).unwrap()
    }

    /// RFC 8785 Appendix B ("Number Serialization Samples"): IEEE 754 bit patterns and their
    /// canonical text. All finite rows. (Table transcribed from the RFC as reproduced
    /// identically in several public JCS test suites; it also matches our recollection.)
    #[test]
    fn numbers_match_rfc8785_appendix_b() {
        let table: [(u64, &str); 24] = [
            (0x0000000000000000, "0"),
            (0x8000000000000000, "0"),
            (0x0000000000000001, "5e-324"),
            (0x8000000000000001, "-5e-324"),
            (0x7fefffffffffffff, "1.7976931348623157e+308"),
            (0xffefffffffffffff, "-1.7976931348623157e+308"),
            (0x4340000000000000, "9007199254740992"),
            (0xc340000000000000, "-9007199254740992"),
            (0x4430000000000000, "295147905179352830000"),
            (0x44b52d02c7e14af5, "9.999999999999997e+22"),
            (0x44b52d02c7e14af6, "1e+23"),
            (0x44b52d02c7e14af7, "1.0000000000000001e+23"),
            (0x444b1ae4d6e2ef4e, "999999999999999700000"),
            (0x444b1ae4d6e2ef4f, "999999999999999900000"),
            (0x444b1ae4d6e2ef50, "1e+21"),
            (0x3eb0c6f7a0b5ed8c, "9.999999999999997e-7"),
            (0x3eb0c6f7a0b5ed8d, "0.000001"),
            (0x41b3de4355555553, "333333333.3333332"),
            (0x41b3de4355555554, "333333333.33333325"),
            (0x41b3de4355555555, "333333333.3333333"),
            (0x41b3de4355555556, "333333333.3333334"),
            (0x41b3de4355555557, "333333333.33333343"),
            (0xbecbf647612f3696, "-0.0000033333333333333333"),
            (0x43143ff3c1cb0959, "1424953923781206.2"),
        ];
        for (bits, want) in table {
            assert_eq!(num(f64::from_bits(bits)), want, "bits {bits:016x}");
        }
        // The two non-finite rows of the table are errors.
        for bits in [0x7fffffffffffffffu64, 0x7ff0000000000000] {
            assert!(number_to_string(f64::from_bits(bits)).is_none());
        }
    }

    /// RFC 8785 §3.2.2 example (primitive data types) and its §3.2.4 UTF-8 bytes.
    #[test]
    fn primitives_example_of_rfc8785() {
        let input = r#"{
          "numbers": [333333333.33333329, 1E30, 4.50, 2e-3, 0.000000000000000000000000001],
          "string": "\u20ac$\u000F\u000aA'\u0042\u0022\u005c\\\"\/",
          "literals": [null, true, false]
        }"#;
        let v: Value = serde_json::from_str(input).unwrap();
        let want = "{\"literals\":[null,true,false],\"numbers\":[333333333.3333333,1e+30,4.5,\
                    0.002,1e-27],\"string\":\"\u{20ac}$\\u000f\\nA'B\\\"\\\\\\\\\\\"/\"}";
        let got = to_canonical_json(&v).unwrap();
        assert_eq!(got, want);
        // §3.2.4: the UTF-8 form begins 7b 22 6c 69 and the euro sign is e2 82 ac.
        let bytes = to_canonical_bytes(&v).unwrap();
        assert_eq!(&bytes[..4], &[0x7b, 0x22, 0x6c, 0x69]);
        assert!(bytes.windows(3).any(|w| w == [0xe2, 0x82, 0xac]));
        assert_eq!(&bytes[bytes.len() - 3..], &[0x2f, 0x22, 0x7d]);
    }

    /// RFC 8785 §3.2.3 sorting example: names sorted by UTF-16 code units (the emoji's
    /// surrogate pair 0xD83D sorts before U+FB33, unlike in UTF-8 or code-point order).
    #[test]
    fn sorting_example_of_rfc8785() {
        let input = r#"{
          "\u20ac": "Euro Sign",
          "\r": "Carriage Return",
          "\ufb33": "Hebrew Letter Dalet With Dagesh",
          "1": "One",
          "\ud83d\ude00": "Emoji: Grinning Face",
          "\u0080": "Control",
          "\u00f6": "Latin Small Letter O With Diaeresis"
        }"#;
        let v: Value = serde_json::from_str(input).unwrap();
        let got = to_canonical_json(&v).unwrap();
        let order = [
            "Carriage Return",
            "One",
            "Control",
            "Latin Small Letter O With Diaeresis",
            "Euro Sign",
            "Emoji: Grinning Face",
            "Hebrew Letter Dalet With Dagesh",
        ];
        let positions: Vec<usize> = order.iter().map(|s| got.find(s).unwrap()).collect();
        assert!(positions.windows(2).all(|w| w[0] < w[1]), "{got}");
        assert!(got.starts_with("{\"\\r\":\"Carriage Return\",\"1\":\"One\""));
    }

    /// Exact ties between two shortest candidates go to the even digit (ECMAScript
    /// Number::toString, note 2 of step 5); the expected strings are Python 3.11 `repr` of the
    /// same doubles (shortest round-trip digits, nearest, ties to even), computed for this test.
    #[test]
    fn ties_between_shortest_candidates_go_to_even() {
        // 1424953923781206.25 is exact (the ulp there is 0.25): a true tie.
        assert_eq!(num(1_424_953_923_781_206.0 + 0.25), "1424953923781206.2");
        assert_eq!(num(5e-324), "5e-324");
        assert_eq!(num(0.1), "0.1");
        assert_eq!(num(100.0), "100");
        assert_eq!(num(1.5e300), "1.5e+300");
        assert_eq!(num(123e-20), "1.23e-18");
    }

    #[test]
    fn canonical_output_is_idempotent_and_integers_become_doubles() {
        let v = serde_json::json!({
            "b": [1, -2, 3.5e-7, 1e21, 12345678901234567890u64, -0.0],
            "a": {"z": "\u{7f}\u{2028}\u{1f}", "é": true},
            "": null
        });
        let once = to_canonical_json(&v).unwrap();
        let again = to_canonical_json(&serde_json::from_str(&once).unwrap()).unwrap();
        assert_eq!(once, again);
        assert_eq!(
            once,
            "{\"\":null,\"a\":{\"z\":\"\u{7f}\u{2028}\\u001f\",\"é\":true},\
             \"b\":[1,-2,3.5e-7,1e+21,12345678901234567000,0]}"
        );
    }
}
