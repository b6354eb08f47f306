//! SHA-256 digests (FIPS 180-4) of bytes, files and the numeric content of datasets.
//!
//! A file's digest changes when an HDF5 file is repacked (other chunking, compression or
//! attribute order) even though no value changed. So the certificate also records a content
//! digest per dataset, defined here ([`ContentHasher`]) and in docs/method.md, Appendix A:
//!
//! ```text
//! SHA-256( "quassay-content-v1\n" <kind> "\n" <shape> "\n" <values> )
//! ```
//!
//! `<kind>` is `f64` or `i64`; `<shape>` the dimensions in decimal, comma-separated (empty for
//! a scalar); `<values>` the values in row-major (C) order, each as 8 little-endian bytes:
//! IEEE 754 binary64 for floats (float32 data converted exactly to binary64 first) and two's
//! complement 64-bit for integers.
//!
//! Why in `inputs`: the file digests are taken from the same read-only mapping the readers use
//! ([`crate::inputs::mapped`]) and the content digests are fed while a run's datasets stream
//! through the reader, so the readers need them and nothing here needs a higher layer. The
//! certificate records them; `certificate::hash` is the same module under its older path.

use std::io::Read;
use std::path::Path;

use sha2::{Digest, Sha256};

/// Lowercase hexadecimal SHA-256 of `bytes`.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// Size in bytes and lowercase hexadecimal SHA-256 of a file: hashed in place from a
/// read-only mapping ([`crate::inputs::mapped`], no copy through a buffer), or read in 1 MiB
/// blocks when the file cannot be mapped.
pub fn sha256_file(path: &Path) -> std::io::Result<(u64, String)> {
    let mut file = std::fs::File::open(path)?;
    let len = file.metadata()?.len();
    let mut hasher = Sha256::new();
    if let Some(map) = crate::inputs::mapped::Mapped::map(&file, len, path) {
        map.read_in_pieces(1 << 20, |piece| hasher.update(piece));
        return Ok((len, hex(&hasher.finalize())));
    }
    let mut buf = vec![0u8; 1 << 20];
    let mut size = 0u64;
    loop {
        let n = file.read(&mut buf)?;
        if n == 0 {
            break;
        }
        hasher.update(&buf[..n]);
        size += n as u64;
    }
    Ok((size, hex(&hasher.finalize())))
}

/// Lowercase hexadecimal of `bytes` (a digest).
pub fn hex(bytes: &[u8]) -> String {
    let mut s = String::with_capacity(2 * bytes.len());
    for b in bytes {
        s.push(char::from(b"0123456789abcdef"[usize::from(b >> 4)]));
        s.push(char::from(b"0123456789abcdef"[usize::from(b & 15)]));
    }
    s
}

/// Bytes encoded per hash update by the `push_*` methods (a multiple of 8 and of SHA-256's
/// 64-byte block).
const ENCODE_BLOCK: usize = 16384;

/// Encodes float values as the content stream's bytes (8 little-endian bytes each), appended
/// to `out`.
pub fn encode_f64(values: &[f64], out: &mut Vec<u8>) {
    let start = out.len();
    out.resize(start + 8 * values.len(), 0);
    for (v, o) in values.iter().zip(out[start..].chunks_exact_mut(8)) {
        o.copy_from_slice(&v.to_le_bytes());
    }
}

/// Encodes integer values as the content stream's bytes (two's complement, 8 little-endian
/// bytes each), appended to `out`.
pub fn encode_i64(values: &[i64], out: &mut Vec<u8>) {
    let start = out.len();
    out.resize(start + 8 * values.len(), 0);
    for (v, o) in values.iter().zip(out[start..].chunks_exact_mut(8)) {
        o.copy_from_slice(&v.to_le_bytes());
    }
}

/// The bytes of `values` in memory, which on a little-endian machine are already the content
/// stream's encoding (IEEE 754 binary64, 8 little-endian bytes each): hashed in place, with no
/// copy. `None` on a big-endian machine, which encodes them instead.
fn le_bytes(values: &[f64]) -> Option<&[u8]> {
    if cfg!(target_endian = "little") {
        // SAFETY: an f64 is 8 initialised bytes with no padding, u8 has alignment 1, and the
        // byte slice covers exactly the memory of `values`, borrowed for as long.
        Some(unsafe { std::slice::from_raw_parts(values.as_ptr().cast::<u8>(), 8 * values.len()) })
    } else {
        None
    }
}

/// The element kind of a content digest.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ContentKind {
    F64,
    I64,
}

impl ContentKind {
    fn as_str(self) -> &'static str {
        match self {
            ContentKind::F64 => "f64",
            ContentKind::I64 => "i64",
        }
    }
}

/// Streaming content digest of one numeric array (see the module header for the format).
///
/// Feed values in row-major order with the `push_*` methods matching the kind; `finish`
/// returns the hex digest. Values of the other kind are refused (`false` is returned).
pub struct ContentHasher {
    hasher: Sha256,
    kind: ContentKind,
}

impl ContentHasher {
    /// Starts a digest for an array of `kind` with dimensions `shape`.
    pub fn new(kind: ContentKind, shape: &[usize]) -> ContentHasher {
        let mut hasher = Sha256::new();
        let dims: Vec<String> = shape.iter().map(|d| d.to_string()).collect();
        hasher.update(b"quassay-content-v1\n");
        hasher.update(kind.as_str().as_bytes());
        hasher.update(b"\n");
        hasher.update(dims.join(",").as_bytes());
        hasher.update(b"\n");
        ContentHasher { hasher, kind }
    }

    /// Appends float values (kind `f64`).
    pub fn push_f64(&mut self, values: &[f64]) -> bool {
        if self.kind != ContentKind::F64 {
            return false;
        }
        match le_bytes(values) {
            Some(bytes) => self.hasher.update(bytes),
            None => self.push_encoded(values, |v, out| out.copy_from_slice(&v.to_le_bytes())),
        }
        true
    }

    /// Appends float32 values, converted exactly to binary64 (kind `f64`).
    pub fn push_f32(&mut self, values: &[f32]) -> bool {
        if self.kind != ContentKind::F64 {
            return false;
        }
        self.push_encoded(values, |v, out| {
            out.copy_from_slice(&f64::from(*v).to_le_bytes())
        });
        true
    }

    /// Appends integer values (kind `i64`).
    pub fn push_i64(&mut self, values: &[i64]) -> bool {
        if self.kind != ContentKind::I64 {
            return false;
        }
        self.push_encoded(values, |v, out| out.copy_from_slice(&v.to_le_bytes()));
        true
    }

    /// Appends values already encoded as the documented byte stream (8 little-endian bytes per
    /// value of this digest's kind, row-major). The caller vouches for the encoding; this is the
    /// fast path for a hashing thread that receives encoded blocks.
    pub fn push_encoded_bytes(&mut self, bytes: &[u8]) {
        self.hasher.update(bytes);
    }

    /// Encodes values into a stack block of [`ENCODE_BLOCK`] bytes and hashes whole blocks:
    /// one 8-byte update per value costs several times the hashing itself.
    fn push_encoded<T>(&mut self, values: &[T], encode: impl Fn(&T, &mut [u8])) {
        let mut block = [0u8; ENCODE_BLOCK];
        for chunk in values.chunks(ENCODE_BLOCK / 8) {
            let bytes = &mut block[..8 * chunk.len()];
            for (v, out) in chunk.iter().zip(bytes.chunks_exact_mut(8)) {
                encode(v, out);
            }
            self.hasher.update(bytes);
        }
    }

    /// The lowercase hex digest.
    pub fn finish(self) -> String {
        hex(&self.hasher.finalize())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// FIPS 180-4 examples (NIST "Cryptographic Standards and Guidelines: Examples with
    /// Intermediate Values", SHA-256): "abc", the 448-bit two-block message, and the empty
    /// string (the widely published empty-input digest).
    #[test]
    fn sha256_matches_the_fips_180_4_examples() {
        assert_eq!(
            sha256_hex(b""),
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
        );
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        assert_eq!(
            sha256_hex(b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"
        );
    }

    #[test]
    fn file_digest_streams_across_blocks() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.bin");
        // One million repetitions of 'a': FIPS 180-4 example digest cdc76e5c…; spans a block
        // boundary of the reader only if larger than 1 MiB, so repeat it three times too.
        let data = vec![b'a'; 1_000_000];
        std::fs::write(&path, &data).unwrap();
        let (size, digest) = sha256_file(&path).unwrap();
        assert_eq!(size, 1_000_000);
        assert_eq!(
            digest,
            "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0"
        );
        let big = data.repeat(3);
        std::fs::write(&path, &big).unwrap();
        assert_eq!(sha256_file(&path).unwrap(), (3_000_000, sha256_hex(&big)));
    }

    #[test]
    fn content_digest_is_the_documented_byte_stream() {
        let mut h = ContentHasher::new(ContentKind::F64, &[2, 2]);
        assert!(h.push_f32(&[1.0, 0.1]));
        assert!(h.push_f64(&[-0.0, 2.5]));
        assert!(!h.push_i64(&[1]));
        let mut bytes = b"quassay-content-v1\nf64\n2,2\n".to_vec();
        for v in [1.0f64, f64::from(0.1f32), -0.0, 2.5] {
            bytes.extend_from_slice(&v.to_le_bytes());
        }
        assert_eq!(h.finish(), sha256_hex(&bytes));
        let mut h = ContentHasher::new(ContentKind::I64, &[3]);
        assert!(h.push_i64(&[1, -1, 7]));
        let mut bytes = b"quassay-content-v1\ni64\n3\n".to_vec();
        for v in [1i64, -1, 7] {
            bytes.extend_from_slice(&v.to_le_bytes());
        }
        assert_eq!(h.finish(), sha256_hex(&bytes));
    }

    /// The blocked encoding gives the byte stream of the definition also across block
    /// boundaries (5000 values: two full blocks of 2048 and a partial one), and the encoded
    /// fast path gives the same digest.
    #[test]
    fn long_content_digests_match_the_byte_stream_by_any_route() {
        let v: Vec<f64> = (0..5000).map(|i| (i as f64).sin() * 1e3).collect();
        let mut bytes = b"quassay-content-v1\nf64\n5000\n".to_vec();
        let header = bytes.len();
        encode_f64(&v, &mut bytes);
        let mut h = ContentHasher::new(ContentKind::F64, &[5000]);
        h.push_f64(&v[..10]);
        h.push_f64(&v[10..]);
        assert_eq!(h.finish(), sha256_hex(&bytes));
        let mut h = ContentHasher::new(ContentKind::F64, &[5000]);
        h.push_encoded_bytes(&bytes[header..]);
        assert_eq!(h.finish(), sha256_hex(&bytes));
        let ints: Vec<i64> = (0..3000).map(|i| i * 7 - 10000).collect();
        let mut bytes = b"quassay-content-v1\ni64\n3000\n".to_vec();
        encode_i64(&ints, &mut bytes);
        let mut h = ContentHasher::new(ContentKind::I64, &[3000]);
        h.push_i64(&ints);
        assert_eq!(h.finish(), sha256_hex(&bytes));
    }
}
