//! Numbers as ECMAScript's `Number.prototype.toString` writes IEEE 754 doubles (RFC 8785
//! §3.2.2.3): the shortest round-trip digits from `zmij`, an exact tie between two candidates
//! resolved to the even one, and ECMAScript's layout (plain or exponent form).

use std::fmt::Write;

/// A finite double as ECMAScript's `Number.prototype.toString` writes it; `None` if not
/// finite.
pub fn number_to_string(x: f64) -> Option<String> {
    let mut out = String::new();
    write_number(x, &mut out).then_some(out)
}

/// A small stack buffer for formatted digits (no heap allocation per number).
struct Digits {
    buf: [u8; 40],
    len: usize,
}

impl Write for Digits {
    fn write_str(&mut self, s: &str) -> std::fmt::Result {
        let end = self.len + s.len();
        if end > self.buf.len() {
            return Err(std::fmt::Error);
        }
        self.buf[self.len..end].copy_from_slice(s.as_bytes());
        self.len = end;
        Ok(())
    }
}

/// The significant digits (ASCII, no leading or trailing zeros, at most 20), their count k
/// and the decimal exponent n of a positive number printed by `zmij` (plain, `1.5`, or
/// scientific, `1.5e-7`, `3.4e+35`): the value is `0.d₁…d_k × 10^n`. `None` if the text is
/// not of that shape (it always is for a positive finite double).
fn shortest_digits(text: &str) -> Option<([u8; 20], usize, i32)> {
    // One pass over the bytes (this runs once per number of the body).
    let bytes = text.as_bytes();
    let mut digits = [0u8; 20];
    let mut k = 0;
    // Position of the decimal point among all mantissa digits (leading zeros included).
    let mut point = None;
    let mut seen = 0i32;
    let mut leading = 0i32;
    let mut exp = 0;
    for (i, &c) in bytes.iter().enumerate() {
        match c {
            b'0' if k == 0 => {
                seen += 1;
                leading += 1;
            }
            b'0'..=b'9' => {
                seen += 1;
                *digits.get_mut(k)? = c;
                k += 1;
            }
            b'.' => point = Some(seen),
            b'e' | b'E' => {
                exp = exponent(&bytes[i + 1..])?;
                break;
            }
            _ => return None,
        }
    }
    while k > 0 && digits[k - 1] == b'0' {
        k -= 1;
    }
    if k == 0 {
        return None;
    }
    let point = point.unwrap_or(seen);
    Some((digits, k, point - leading + exp))
}

/// A decimal exponent as printed after `e`: an optional sign, then 1 to 4 digits.
fn exponent(bytes: &[u8]) -> Option<i32> {
    let (negative, digits) = match bytes.split_first()? {
        (b'-', rest) => (true, rest),
        (b'+', rest) => (false, rest),
        _ => (false, bytes),
    };
    if digits.is_empty() || digits.len() > 4 {
        return None;
    }
    let mut e = 0i32;
    for &c in digits {
        if !c.is_ascii_digit() {
            return None;
        }
        e = 10 * e + i32::from(c - b'0');
    }
    Some(if negative { -e } else { e })
}

/// Appends the decimal digits of `u` (no allocation, no formatting machinery).
fn push_u64(mut u: u64, out: &mut String) {
    let mut buf = [0u8; 20];
    let mut i = buf.len();
    loop {
        i -= 1;
        buf[i] = b'0' + (u % 10) as u8;
        u /= 10;
        if u == 0 {
            break;
        }
    }
    // ASCII digits.
    out.push_str(std::str::from_utf8(&buf[i..]).unwrap_or(""));
}

/// Appends the ECMAScript form of `x` to `out`; `false` (nothing written) if `x` is not
/// finite.
///
/// Digits: `zmij` (Schubfach) gives the shortest string that round-trips, and of those the
/// one nearest to x; its length k is ECMAScript's (Number::toString step 5: k as small as
/// possible, then the k-digit value nearest to x, ties to the even one). It may pick the
/// odd one of an exact tie (RFC 8785 Appendix B: 1424953923781206.25 → …206.2). A tie is
/// detected exactly in integer arithmetic ([`tie_partner`]); then the even partner is taken
/// if it reads back as x (both do, except at a power of two, where the rounding interval
/// below x is half as wide: 2^-24 = 5.9604644775390625e-8 gives …063, as ECMAScript and
/// Python do, since …062 reads back as another double).
pub(super) fn write_number(x: f64, out: &mut String) -> bool {
    if !x.is_finite() {
        return false;
    }
    if x == 0.0 {
        out.push('0'); // also −0 (RFC 8785 §3.2.2.3)
        return true;
    }
    if x < 0.0 {
        out.push('-');
    }
    let a = x.abs();
    // `as` truncates toward zero (exact below 2^53): the round trip holds for integers only.
    if a < 9_007_199_254_740_992.0 && (a as u64) as f64 == a {
        // An integer below 2^53: every neighbouring integer is a double, so the shortest
        // digits are the integer's own (trailing zeros aside) and, with n ≤ 16 ≤ 21,
        // ECMAScript writes the integer in full.
        push_u64(a as u64, out);
        return true;
    }
    let mut buffer = zmij::Buffer::new();
    let text = buffer.format_finite(a);
    if !may_tie(a) && push_if_ecmascript(text, out) {
        return true;
    }
    let Some((mut digits, mut k, mut n)) = shortest_digits(text) else {
        return false;
    };
    if let Some(partner) = tie_partner(a, &digits[..k], n) {
        let mut even = Digits {
            buf: [0; 40],
            len: 0,
        };
        // The partner's digits, trailing zeros dropped, and its exponent.
        let (mut p, mut q) = (partner, n - k as i32);
        while p % 10 == 0 {
            p /= 10;
            q += 1;
        }
        if write!(even, "{p}e{q}").is_ok() {
            let text = std::str::from_utf8(&even.buf[..even.len]).unwrap_or("");
            if text.parse::<f64>() == Ok(a) {
                let len = text.find('e').unwrap_or(0);
                if len <= digits.len() {
                    digits[..len].copy_from_slice(&text.as_bytes()[..len]);
                    k = len;
                    n = q + len as i32;
                }
            }
        }
    }
    layout(&digits[..k], n, out);
    true
}

/// Whether the positive finite `a` can lie exactly halfway between two decimals `D × 10^q`
/// of its shortest digit count: a quick filter before [`tie_partner`], which it never
/// wrongly excludes (it may let through numbers that are no tie).
///
/// A tie needs `q = e + 1` (`a = m × 2^e`, m odd; see [`tie_partner`]), with `q = n − k`,
/// `1 ≤ k ≤ 17` digits (a double's shortest form has at most 17) and `10^(n−1) ≤ a < 10^n`.
/// With `2^b ≤ a < 2^(b+1)`, `n − 1` lies between `⌊b log₁₀2⌋` and `⌊(b+1) log₁₀2⌋`; these
/// are taken as `(b × 78913) >> 18` (an integer approximation of `b log₁₀2`, off by at most
/// one for `|b| ≤ 1100`), widened by one on each side.
pub(super) fn may_tie(a: f64) -> bool {
    let bits = a.to_bits();
    let exp_bits = ((bits >> 52) & 0x7ff) as i32;
    let frac = bits & ((1u64 << 52) - 1);
    let (m, e0) = if exp_bits == 0 {
        (frac, -1074)
    } else {
        (frac | (1u64 << 52), exp_bits - 1075)
    };
    if m == 0 {
        return false;
    }
    let e = e0 + m.trailing_zeros() as i32; // the exponent with the odd mantissa
    let b = e0 + 63 - m.leading_zeros() as i32; // ⌊log₂ a⌋
    let n_low = ((b * 78_913) >> 18) + 1 - 1;
    let n_high = (((b + 1) * 78_913) >> 18) + 1 + 1;
    (n_low - 17..=n_high - 1).contains(&(e + 1))
}

/// Appends `text` (zmij's shortest form of a positive number, no tie: nearest digits are
/// ECMAScript's) if it is already in ECMAScript's layout, and says whether it did. It is for
/// most numbers: zmij writes a fraction plainly (`12.34`, `0.001234`) for decimal exponents
/// −5 to 15, where ECMAScript does too, and otherwise `1.5e-7`, `1e+300`, as ECMAScript does
/// outside −6 to 20. Anything else (`1234.0`, an exponent of −6 or 16 to 20, or any other
/// shape) is left to [`layout`].
fn push_if_ecmascript(text: &str, out: &mut String) -> bool {
    let b = text.as_bytes();
    let (Some(&first), Some(&last)) = (b.first(), b.last()) else {
        return false;
    };
    if !first.is_ascii_digit() || last == b'0' || last == b'.' {
        return false; // trailing zeros (`1234.0`) or an unexpected shape
    }
    let tail = b.len().saturating_sub(6);
    let shape_ok = match b[tail..].iter().position(|&c| c == b'e') {
        Some(i) => {
            let (mantissa, exp) = (&b[..tail + i], &b[tail + i + 1..]);
            let plain_in_ecmascript = match exponent(exp) {
                Some(x) => x == -6 || (16..=20).contains(&x),
                None => return false,
            };
            matches!(exp, [b'+' | b'-', b'1'..=b'9', ..])
                && !plain_in_ecmascript
                && first != b'0'
                && match mantissa {
                    [_] => true,
                    [_, b'.', rest @ ..] => {
                        !rest.is_empty()
                            && rest.iter().all(u8::is_ascii_digit)
                            && rest.last() != Some(&b'0')
                    }
                    _ => false,
                }
        }
        None => {
            // Plain: digits with one point, a fraction that does not end in 0, and no
            // leading zero unless the integer part is `0`; at most 21 integer digits.
            let point = b.iter().position(|&c| c == b'.');
            match point {
                Some(p) => {
                    let fraction = &b[p + 1..];
                    // `0.` followed by at least 6 zeros is ECMAScript's exponent form.
                    let small = first == b'0' && fraction.iter().take(6).all(|&c| c == b'0');
                    p <= 21
                        && (first != b'0' || p == 1)
                        && !small
                        && b[..p].iter().all(u8::is_ascii_digit)
                        && fraction.iter().all(u8::is_ascii_digit)
                }
                None => false,
            }
        }
    };
    if shape_ok {
        out.push_str(text);
    }
    shape_ok
}

/// ECMAScript's layout (Number::toString steps 6–10) of the digits `d₁…d_k` with the value
/// `0.d₁…d_k × 10^n`.
pub(super) fn layout(digits: &[u8], n: i32, out: &mut String) {
    // The digits are ASCII.
    let d = std::str::from_utf8(digits).unwrap_or("");
    let k = d.len() as i32;
    if k <= n && n <= 21 {
        out.push_str(d);
        out.push_str(&ZEROS[..(n - k) as usize]);
    } else if 0 < n && n <= 21 {
        out.push_str(&d[..n as usize]);
        out.push('.');
        out.push_str(&d[n as usize..]);
    } else if -6 < n && n <= 0 {
        out.push_str("0.");
        out.push_str(&ZEROS[..(-n) as usize]);
        out.push_str(d);
    } else {
        out.push_str(&d[..1]);
        if k > 1 {
            out.push('.');
            out.push_str(&d[1..]);
        }
        let e = n - 1;
        out.push_str(if e < 0 { "e-" } else { "e+" });
        push_u64(u64::from(e.unsigned_abs()), out);
    }
}

/// Zeros for the plain layouts (at most 21 − 1 after the digits, 5 after `0.`).
const ZEROS: &str = "00000000000000000000";

/// If the positive double `a` lies exactly halfway between the k-digit decimal `D × 10^q`
/// given by `digits` (`q = n − k`) and a neighbour `(D ± 1) × 10^q`, with `D` odd, that
/// neighbour `D ± 1` (even); `None` otherwise. A tie means `2a = (2D ± 1) × 10^q` exactly.
///
/// With `a = m × 2^e`, m odd, and `c = 2D ± 1` odd, the equation `m 2^(e+1) = c 2^q 5^q`
/// holds only if the powers of two agree, `e + 1 = q`, and then the odd parts: `m = c 5^q`
/// for `q ≥ 0`, `m 5^(−q) = c` for `q < 0`. All in `u128`, with overflow meaning "no".
pub(super) fn tie_partner(a: f64, digits: &[u8], n: i32) -> Option<u64> {
    let bits = a.to_bits();
    let exp_bits = ((bits >> 52) & 0x7ff) as i32;
    let frac = bits & ((1u64 << 52) - 1);
    let (mut m, mut e) = if exp_bits == 0 {
        (frac, -1074)
    } else {
        (frac | (1u64 << 52), exp_bits - 1075)
    };
    if m == 0 {
        return None;
    }
    let tz = m.trailing_zeros();
    m >>= tz;
    e += tz as i32;
    let q = n - digits.len() as i32;
    if e + 1 != q {
        return None;
    }
    let mut d: u64 = 0;
    for &c in digits {
        d = d.checked_mul(10)?.checked_add(u64::from(c - b'0'))?;
    }
    if d % 2 == 0 {
        return None;
    }
    let m = u128::from(m);
    let d128 = u128::from(d);
    let pow5 = 5u128.checked_pow(q.unsigned_abs());
    for (c, partner) in [(2 * d128 + 1, d + 1), (2 * d128 - 1, d - 1)] {
        let equal = if q >= 0 {
            pow5.and_then(|p| c.checked_mul(p)) == Some(m)
        } else {
            pow5.and_then(|p| m.checked_mul(p)) == Some(c)
        };
        if equal && partner > 0 {
            return Some(partner);
        }
    }
    None
}
