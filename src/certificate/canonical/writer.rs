//! The serialiser of RFC 8785: values, object members in the order of the UTF-16 code units
//! of their names, strings escaped as `JSON.stringify` does, the elements of large arrays
//! serialised in parallel and emitted in order, and the buffered sink that hands the bytes to
//! SHA-256 and to the writer as they are produced.

use std::fmt::Write;

use serde_json::Value;
use sha2::{Digest, Sha256};

use super::number::write_number;
use super::*;

/// Bytes written before they are handed on to the sink.
pub(super) const FLUSH_BYTES: usize = 1 << 16;

/// Where the text goes once it leaves the buffer: the hasher (if hashing) and the writer.
pub(super) struct Sink<'a> {
    pub(super) hasher: Option<&'a mut Sha256>,
    pub(super) w: Option<&'a mut dyn std::io::Write>,
}

/// The canonical text being written: kept whole (no sink), or handed on in pieces.
pub(super) struct Out<'a> {
    pub(super) buf: String,
    pub(super) sink: Option<Sink<'a>>,
    /// Whether large arrays are split among threads (not inside an element already being
    /// written on a thread of its own: one level of parallelism is enough and copies each
    /// byte once).
    pub(super) parallel: bool,
}

impl Out<'_> {
    /// Text kept whole, large arrays written in parallel.
    pub(super) fn whole() -> Out<'static> {
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
    pub(super) fn flush(&mut self) -> Result<(), Stop> {
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
pub(super) enum Stop {
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

pub(super) fn write_value(v: &Value, out: &mut Out) -> Result<(), Stop> {
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
pub(super) fn non_finite_error(v: &Value) -> CanonicalError {
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
