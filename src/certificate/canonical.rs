//! Canonical JSON per RFC 8785 (JSON Canonicalization Scheme), for the certificate's body.
//!
//! The body's SHA-256 is its digest, so the bytes must be the same on every machine: object
//! members sorted by the UTF-16 code units of their names, no whitespace, strings escaped as
//! ECMAScript's `JSON.stringify` does, and numbers written as ECMAScript's
//! `Number.prototype.toString` writes IEEE 754 doubles (RFC 8785 §3.2.2.3).
//!
//! Numbers: the `zmij` crate (Schubfach, the printer serde_json uses) gives the shortest
//! digits that round-trip, nearest to the value; an exact tie between two such candidates is
//! resolved to the even one here, which is ECMAScript's choice among candidates of that
//! length (checked against Python's `repr` on 13 294 numbers and RFC 8785 Appendix B). The
//! layout (plain or exponent form, `e+`/`e-`) is ECMAScript's: zmij's text is kept where it
//! already is (most numbers), and laid out again from its digits otherwise.
//! serde_json integers are converted to the nearest double first, as RFC 8785 §3.2.2.3 says
//! (integers beyond 2^53 lose precision there, by design of the scheme).
//!
//! The form is written once and handed, as it is produced, to SHA-256 and to a writer (the
//! certificate file holds exactly the hashed bytes). The elements of a large array (one
//! object per observable) are serialised in parallel, each into its own text by the same
//! sequential code, and emitted in their order: the bytes do not depend on the threads.

use std::fmt::Write;

use serde_json::Value;
use sha2::{Digest, Sha256};

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
    let mut out = Out::whole();
    match write_value(v, &mut out) {
        Ok(()) => Ok(out.buf),
        Err(_) => Err(non_finite_error(v)),
    }
}

/// The UTF-8 bytes of the canonical form (what is hashed).
pub fn to_canonical_bytes(v: &Value) -> Result<Vec<u8>, CanonicalError> {
    to_canonical_json(v).map(String::into_bytes)
}

/// Lowercase hexadecimal SHA-256 of the canonical form of `v`, computed while the form is
/// written (in pieces of about 64 KiB: the whole form is never held in memory).
pub fn canonical_sha256_hex(v: &Value) -> Result<String, CanonicalError> {
    let mut hasher = Sha256::new();
    match write_streamed(v, Some(&mut hasher), None) {
        Ok(()) => Ok(super::hash::hex(&hasher.finalize())),
        // Nothing is written, so the only stop is a non-finite number.
        Err(_) => Err(non_finite_error(v)),
    }
}

/// Why the canonical form could not be written.
#[derive(Debug, thiserror::Error)]
pub enum CanonicalWriteError {
    #[error(transparent)]
    Canonical(#[from] CanonicalError),
    #[error(transparent)]
    Io(#[from] std::io::Error),
}

/// Writes the canonical form of `v` to `w` as it is produced (in pieces of about 64 KiB, or
/// whole elements of a large array: never the whole form at once) and, if `hash`, returns the
/// lowercase hexadecimal SHA-256 of exactly the bytes written (`None` without `hash`). The
/// one serialisation then serves both the file and the digest.
///
/// Large arrays (two or more elements, all objects or arrays) have their elements serialised
/// in parallel, each into its own text, and emitted in order: the bytes are those of the
/// sequential writer.
pub fn write_canonical(
    v: &Value,
    w: &mut dyn std::io::Write,
    hash: bool,
) -> Result<Option<String>, CanonicalWriteError> {
    let mut hasher = hash.then(Sha256::new);
    match write_streamed(v, hasher.as_mut(), Some(w)) {
        Ok(()) => Ok(hasher.map(|h| super::hash::hex(&h.finalize()))),
        Err(Stop::NonFinite) => Err(non_finite_error(v).into()),
        Err(Stop::Io(e)) => Err(e.into()),
    }
}

/// The canonical form of `v`, handed in pieces to `hasher` and `w` (either may be absent).
fn write_streamed<'a>(
    v: &Value,
    hasher: Option<&'a mut Sha256>,
    w: Option<&'a mut dyn std::io::Write>,
) -> Result<(), Stop> {
    let mut out = Out {
        buf: String::with_capacity(FLUSH_BYTES + 4096),
        sink: Some(Sink { hasher, w }),
        parallel: true,
    };
    write_value(v, &mut out)?;
    out.flush()
}

/// Bytes written before they are handed on to the sink.
const FLUSH_BYTES: usize = 1 << 16;

/// Where the text goes once it leaves the buffer: the hasher (if hashing) and the writer.
struct Sink<'a> {
    hasher: Option<&'a mut Sha256>,
    w: Option<&'a mut dyn std::io::Write>,
}

/// The canonical text being written: kept whole (no sink), or handed on in pieces.
struct Out<'a> {
    buf: String,
    sink: Option<Sink<'a>>,
    /// Whether large arrays are split among threads (not inside an element already being
    /// written on a thread of its own: one level of parallelism is enough and copies each
    /// byte once).
    parallel: bool,
}

impl Out<'_> {
    /// Text kept whole, large arrays written in parallel.
    fn whole() -> Out<'static> {
        Out {
            buf: String::new(),
            sink: None,
            parallel: true,
        }
    }
    fn push_str(&mut self, s: &str) {
        self.buf.push_str(s);
    }
    fn push(&mut self, c: char) {
        self.buf.push(c);
    }
    /// Hands the buffered text to the sink, if any.
    fn flush(&mut self) -> Result<(), Stop> {
        if let Some(sink) = self.sink.as_mut() {
            sink.take(self.buf.as_bytes())?;
            self.buf.clear();
        }
        Ok(())
    }
    /// [`Out::flush`] once the buffer is large (called between values).
    fn maybe_flush(&mut self) -> Result<(), Stop> {
        if self.buf.len() >= FLUSH_BYTES {
            self.flush()?;
        }
        Ok(())
    }
    /// Appends a finished piece of text, handing it to the sink as it stands if there is one
    /// (no copy into the buffer).
    fn push_piece(&mut self, piece: &str) -> Result<(), Stop> {
        if self.sink.is_some() {
            self.flush()?;
            if let Some(sink) = self.sink.as_mut() {
                sink.take(piece.as_bytes())?;
            }
            Ok(())
        } else {
            self.buf.push_str(piece);
            Ok(())
        }
    }
}

impl Sink<'_> {
    fn take(&mut self, bytes: &[u8]) -> Result<(), Stop> {
        if let Some(h) = self.hasher.as_mut() {
            h.update(bytes);
        }
        match self.w.as_mut() {
            Some(w) => w.write_all(bytes).map_err(Stop::Io),
            None => Ok(()),
        }
    }
}

/// Why writing stopped: a non-finite number (where is found afterwards, see
/// [`non_finite_error`]) or the writer failed.
enum Stop {
    NonFinite,
    Io(std::io::Error),
}

/// The number as a double, as RFC 8785 §3.2.2.3 reads it.
fn as_double(n: &serde_json::Number) -> f64 {
    if let Some(u) = n.as_u64() {
        u as f64 // round to nearest, ties to even (Rust `as` semantics)
    } else if let Some(i) = n.as_i64() {
        i as f64
    } else {
        n.as_f64().unwrap_or(f64::NAN)
    }
}

fn write_value(v: &Value, out: &mut Out) -> Result<(), Stop> {
    match v {
        Value::Null => out.push_str("null"),
        Value::Bool(true) => out.push_str("true"),
        Value::Bool(false) => out.push_str("false"),
        Value::Number(n) => {
            if !write_number(as_double(n), &mut out.buf) {
                return Err(Stop::NonFinite);
            }
        }
        Value::String(s) => write_string(s, &mut out.buf),
        Value::Array(items) if out.parallel && parallel_array(items) => {
            write_array_in_parallel(items, out)?;
        }
        Value::Array(items) => {
            out.push('[');
            for (i, item) in items.iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                write_value(item, out)?;
                out.maybe_flush()?;
            }
            out.push(']');
        }
        Value::Object(map) => {
            out.push('{');
            if in_utf16_order(map) {
                for (i, (k, v)) in map.iter().enumerate() {
                    write_member(i, k, v, out)?;
                }
            } else {
                for (i, (k, v)) in sorted_members(map).into_iter().enumerate() {
                    write_member(i, k, v, out)?;
                }
            }
            out.push('}');
        }
    }
    Ok(())
}

fn write_member(i: usize, k: &str, v: &Value, out: &mut Out) -> Result<(), Stop> {
    if i > 0 {
        out.push(',');
    }
    write_string(k, &mut out.buf);
    out.push(':');
    write_value(v, out)?;
    out.maybe_flush()
}

/// Whether an array's elements are written in parallel: at least two, and every one an
/// object or an array. Such elements are where the bulk of a certificate body lies (one
/// object per observable, each with many columns); an array of numbers or strings is cheap
/// per element, and splitting it would cost more in copies than it gains.
fn parallel_array(items: &[Value]) -> bool {
    items.len() >= 2 && items.iter().all(|x| x.is_object() || x.is_array())
}

/// Elements serialised per batch, as a multiple of the threads: memory holds at most two
/// batches of element texts (one being emitted, the next being written).
const BATCH_PER_THREAD: usize = 2;

/// Writes an array whose elements are serialised in parallel (each element into its own text
/// by the sequential writer, so its bytes do not depend on threads), then emitted in their
/// order. Batches are pipelined: while one batch is emitted (hashed, written) on this thread,
/// the next is serialised by the thread pool.
fn write_array_in_parallel(items: &[Value], out: &mut Out) -> Result<(), Stop> {
    use rayon::prelude::*;
    let batch = (BATCH_PER_THREAD * rayon::current_num_threads()).max(2);
    let serialise = &|chunk: &[Value]| -> Result<Vec<String>, Stop> {
        chunk
            .par_iter()
            .map(|item| {
                let mut own = Out {
                    buf: String::new(),
                    sink: None,
                    parallel: false,
                };
                write_value(item, &mut own).map(|()| own.buf)
            })
            .collect()
    };
    out.push('[');
    let mut chunks = items.chunks(batch);
    let mut ready = chunks.next().map(serialise).transpose()?;
    let mut first = true;
    while let Some(texts) = ready.take() {
        let mut next = None;
        let emitted = rayon::in_place_scope(|scope| {
            if let Some(chunk) = chunks.next() {
                let next = &mut next;
                scope.spawn(move |_| *next = Some(serialise(chunk)));
            }
            for text in &texts {
                if !first {
                    out.push(',');
                }
                first = false;
                out.push_piece(text)?;
            }
            Ok(())
        });
        emitted?;
        ready = next.transpose()?;
    }
    out.push(']');
    Ok(())
}

/// Whether the map's own iteration order is already the order of RFC 8785 §3.2.3 (UTF-16
/// code units of the names). It is when the names come in strictly increasing byte order
/// (code-point order, which serde_json's sorted map gives) and none holds a character at or
/// above U+E000 (its UTF-8 lead byte is 0xEE or higher): below U+E000, UTF-16 code-unit order
/// and code-point order agree; above, a supplementary character (a surrogate pair, 0xD800…)
/// sorts before U+E000…U+FFFF in UTF-16 and after them in code-point order.
fn in_utf16_order(map: &serde_json::Map<String, Value>) -> bool {
    let mut last: Option<&str> = None;
    for k in map.keys() {
        if k.bytes().any(|b| b >= 0xEE) {
            return false;
        }
        if let Some(prev) = last {
            if prev.as_bytes() >= k.as_bytes() {
                return false;
            }
        }
        last = Some(k);
    }
    true
}

/// The members sorted by the UTF-16 code units of their names.
fn sorted_members(map: &serde_json::Map<String, Value>) -> Vec<(&String, &Value)> {
    let mut members: Vec<(Vec<u16>, &String, &Value)> = map
        .iter()
        .map(|(k, v)| (k.encode_utf16().collect(), k, v))
        .collect();
    members.sort_by(|a, b| a.0.cmp(&b.0));
    members.into_iter().map(|(_, k, v)| (k, v)).collect()
}

/// The error for the first non-finite number in canonical order (a rare path: it walks the
/// value again, keeping the JSON pointer, RFC 6901, as it goes).
fn non_finite_error(v: &Value) -> CanonicalError {
    fn find(v: &Value, pointer: &mut String) -> bool {
        match v {
            Value::Number(n) => !as_double(n).is_finite(),
            Value::Array(items) => items.iter().enumerate().any(|(i, item)| {
                let len = pointer.len();
                let _ = write!(pointer, "/{i}");
                let found = find(item, pointer);
                if !found {
                    pointer.truncate(len);
                }
                found
            }),
            Value::Object(map) => sorted_members(map).into_iter().any(|(k, item)| {
                let len = pointer.len();
                pointer.push('/');
                pointer.push_str(&k.replace('~', "~0").replace('/', "~1"));
                let found = find(item, pointer);
                if !found {
                    pointer.truncate(len);
                }
                found
            }),
            _ => false,
        }
    }
    let mut pointer = String::new();
    find(v, &mut pointer);
    CanonicalError::NonFinite { pointer }
}

/// A string as `JSON.stringify` writes it (RFC 8785 §3.2.2.2): runs of characters that need
/// no escape are copied whole.
fn write_string(s: &str, out: &mut String) {
    out.push('"');
    let bytes = s.as_bytes();
    let mut start = 0;
    for (i, &b) in bytes.iter().enumerate() {
        let escape = match b {
            b'"' => "\\\"",
            b'\\' => "\\\\",
            0x08 => "\\b",
            0x09 => "\\t",
            0x0A => "\\n",
            0x0C => "\\f",
            0x0D => "\\r",
            b if b < 0x20 => "",
            _ => continue,
        };
        // Every byte matched above is ASCII, so `i` is a character boundary.
        out.push_str(&s[start..i]);
        if escape.is_empty() {
            let _ = write!(out, "\\u{:04x}", b);
        } else {
            out.push_str(escape);
        }
        start = i + 1;
    }
    out.push_str(&s[start..]);
    out.push('"');
}

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
fn write_number(x: f64, out: &mut String) -> bool {
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
fn may_tie(a: f64) -> bool {
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
fn layout(digits: &[u8], n: i32, out: &mut String) {
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
fn tie_partner(a: f64, digits: &[u8], n: i32) -> Option<u64> {
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

    /// Against Python's float repr (shortest round-trip digits, nearest, ties to even) laid
    /// out as ECMAScript does: the fixture `tests/reference/canonical/numbers.txt` (written
    /// by `make_numbers.py` beside it) holds every power of two and its neighbours, random
    /// bit patterns, dyadic fractions with few bits (where exact ties live) and integers.
    #[test]
    fn numbers_match_the_python_repr_fixture() {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/reference/canonical/numbers.txt"
        );
        let text = std::fs::read_to_string(path).unwrap();
        let mut n = 0;
        for line in text.lines() {
            let (bits, want) = line.split_once(' ').unwrap();
            let x = f64::from_bits(u64::from_str_radix(bits, 16).unwrap());
            assert_eq!(num(x), want, "bits {bits}");
            n += 1;
        }
        assert_eq!(n, 13_294);
    }

    /// The previous writer: digit count from `{:e}`, digits from Rust's exact formatting at
    /// that count (nearest, ties to even), for every number. It is right wherever the
    /// rounding interval of x is symmetric, i.e. except at exact powers of two, where the
    /// nearest k-digit decimal may lie outside the narrower lower half of the interval and
    /// not round-trip (2^-1013: it gave 7.120236347223044e-307, which reads back as another
    /// double; the fixture above and the fast writer give …045).
    fn previous(x: f64) -> String {
        if x == 0.0 {
            return "0".into();
        }
        let mut out = String::new();
        if x < 0.0 {
            out.push('-');
        }
        let shortest = format!("{:e}", x.abs());
        let k = shortest
            .split_once('e')
            .unwrap()
            .0
            .chars()
            .filter(|c| *c != '.')
            .count();
        let sci = format!("{:.*e}", k - 1, x.abs());
        let (mantissa, exp) = sci.split_once('e').unwrap();
        let digits: String = mantissa.chars().filter(|c| *c != '.').collect();
        layout(digits.as_bytes(), exp.parse::<i32>().unwrap() + 1, &mut out);
        out
    }

    /// The fast writer gives the previous writer's bytes away from powers of two, over
    /// 200 000 random bit patterns (every exponent), integers, dyadic fractions with few bits
    /// and values at x.25 steps above 2^50; the exact ties with an odd shortest digit string
    /// among them are counted, so the tie path is exercised.
    #[test]
    fn the_fast_number_writer_matches_the_previous_one_off_powers_of_two() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha20Rng::seed_from_u64(8785);
        let mut xs: Vec<f64> = (0..200_000)
            .map(|_| f64::from_bits(rng.random::<u64>()))
            .filter(|x| x.is_finite())
            .collect();
        for i in 0..20_000u64 {
            xs.push(i as f64);
            xs.push((rng.random::<u64>() >> rng.random_range(0..64)) as f64);
            let m = rng.random_range(1u64..1 << 20) as f64;
            xs.push(m * 2f64.powi(rng.random_range(-60..80)));
            xs.push(1_424_953_923_781_206.0 + 0.25 * (i % 8) as f64);
        }
        let (mut ties, mut checked) = (0, 0);
        for &x in &xs {
            let a = x.abs();
            if a.to_bits() & ((1 << 52) - 1) == 0 {
                continue; // a power of two (or zero): see `previous`
            }
            let sh = format!("{a:e}");
            let (m, e) = sh.split_once('e').unwrap();
            let d: Vec<u8> = m.bytes().filter(u8::is_ascii_digit).collect();
            let tie = tie_partner(a, &d, e.parse::<i32>().unwrap() + 1).is_some();
            // The quick filter lets every tie through.
            assert!(!tie || may_tie(a), "bits {:016x}", x.to_bits());
            ties += usize::from(tie);
            assert_eq!(num(x), previous(x), "bits {:016x}", x.to_bits());
            checked += 1;
        }
        assert!(checked > 250_000, "{checked}");
        assert!(ties >= 1000, "only {ties} exact ties exercised");
    }

    /// The streamed digest is the SHA-256 (FIPS 180-4) of the canonical bytes, also for a
    /// body of several flushes; and the RFC 8785 §3.2.2 example hashes to the digest of its
    /// canonical text as given in the RFC.
    #[test]
    fn the_streamed_digest_is_the_digest_of_the_canonical_bytes() {
        use super::super::hash::sha256_hex;
        let big = serde_json::json!({
            "b": (0..40_000).map(|i| f64::from(i) * 0.37).collect::<Vec<_>>(),
            "a": [{"z": "x\ny", "é": 1}, {"\u{e000}": 1, "\u{1f600}": 2}],
        });
        let bytes = to_canonical_bytes(&big).unwrap();
        assert!(bytes.len() > 4 * FLUSH_BYTES);
        assert_eq!(canonical_sha256_hex(&big).unwrap(), sha256_hex(&bytes));
        let rfc = "{\"literals\":[null,true,false],\"numbers\":[333333333.3333333,1e+30,4.5,\
                   0.002,1e-27],\"string\":\"\u{20ac}$\\u000f\\nA'B\\\"\\\\\\\\\\\"/\"}";
        let v: Value = serde_json::from_str(rfc).unwrap();
        assert_eq!(
            canonical_sha256_hex(&v).unwrap(),
            sha256_hex(rfc.as_bytes())
        );
    }

    /// The sequential writer (no array split among threads), as a reference for the
    /// parallel one; it is the writer the RFC 8785 tests above check on their small values.
    fn sequential(v: &Value) -> String {
        let mut out = Out {
            buf: String::new(),
            sink: None,
            parallel: false,
        };
        assert!(write_value(v, &mut out).is_ok());
        out.buf
    }

    /// A body with nesting: arrays of objects holding arrays of objects, arrays of arrays,
    /// mixed arrays (not split), empty elements, names above U+E000 (the sorting path) and
    /// escapes, with enough elements for several batches and enough bytes for many flushes.
    fn nested_body(n: usize) -> Value {
        let element = |i: usize| {
            serde_json::json!({
                "name": format!("obs \"{i}\"\n\u{1f}"),
                "column": (0..500).map(|t| (t as f64 + 0.1) * 1.7f64.powi(i as i32 % 40 - 20)).collect::<Vec<_>>(),
                "inner": [{"a": [i, -0.0, 1e21]}, [], {}, [[1, 2], [3.5, {"\u{e000}": 1, "\u{1f600}": 2}]]],
                "mixed": [1, {"b": i}, "s", [i]],
            })
        };
        serde_json::json!({
            "observables": (0..n).map(element).collect::<Vec<_>>(),
            "checks": {"observables": (0..n).rev().map(element).collect::<Vec<_>>()},
            "pairs": [[0.5, 0.25], [1, 2]],
            "one": [element(7)],
            "empty": [[], {}],
        })
    }

    /// The parallel writer gives the sequential writer's bytes, bit for bit, kept whole or
    /// streamed to a writer, with 1, 2 or 3 threads (the batch length follows the thread
    /// count); the streamed digest is the SHA-256 (FIPS 180-4, tested in `hash`) of exactly
    /// the bytes written.
    #[test]
    fn the_parallel_writer_gives_the_sequential_bytes() {
        use super::super::hash::sha256_hex;
        for n in [0, 1, 2, 3, 37] {
            let v = nested_body(n);
            let want = sequential(&v);
            for threads in [1, 2, 3] {
                let pool = rayon::ThreadPoolBuilder::new()
                    .num_threads(threads)
                    .build()
                    .unwrap();
                let (whole, streamed, digest) = pool.install(|| {
                    let mut bytes = Vec::new();
                    let digest = write_canonical(&v, &mut bytes, true).unwrap();
                    (to_canonical_json(&v).unwrap(), bytes, digest)
                });
                assert!(whole == want, "n = {n}, {threads} threads: kept whole");
                assert!(
                    streamed == want.as_bytes(),
                    "n = {n}, {threads} threads: streamed"
                );
                assert_eq!(digest, Some(sha256_hex(want.as_bytes())));
                assert_eq!(
                    canonical_sha256_hex(&v).unwrap(),
                    sha256_hex(want.as_bytes())
                );
            }
        }
        // The 37-element body is large enough for the pieces and the batches to matter.
        assert!(sequential(&nested_body(37)).len() > 8 * FLUSH_BYTES);
        // Without hashing, the same bytes and no digest.
        let v = nested_body(3);
        let mut bytes = Vec::new();
        assert_eq!(write_canonical(&v, &mut bytes, false).unwrap(), None);
        assert_eq!(bytes, sequential(&v).into_bytes());
    }

    /// A failing writer stops the canonical form with its error, also inside a parallel
    /// array; nothing panics.
    #[test]
    fn a_failing_writer_is_an_error() {
        struct Full(usize);
        impl std::io::Write for Full {
            fn write(&mut self, b: &[u8]) -> std::io::Result<usize> {
                if self.0 < b.len() {
                    return Err(std::io::Error::other("disk full"));
                }
                self.0 -= b.len();
                Ok(b.len())
            }
            fn flush(&mut self) -> std::io::Result<()> {
                Ok(())
            }
        }
        let v = nested_body(37);
        for room in [0, 100, FLUSH_BYTES * 5] {
            match write_canonical(&v, &mut Full(room), true) {
                Err(CanonicalWriteError::Io(e)) => assert_eq!(e.to_string(), "disk full"),
                other => panic!("{other:?}"),
            }
        }
    }

    /// Names at or above U+E000 take the sorting path; the order is UTF-16's (the surrogate
    /// pair of U+1F600 before U+E000), not the map's code-point order.
    #[test]
    fn names_above_u_e000_are_sorted_by_utf16_code_units() {
        let v = serde_json::json!({"\u{e000}": 1, "\u{1f600}": 2, "a": 3});
        assert_eq!(
            to_canonical_json(&v).unwrap(),
            "{\"a\":3,\"\u{1f600}\":2,\"\u{e000}\":1}"
        );
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
