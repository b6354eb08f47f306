//! Unit tests of canonical JSON: RFC 8785's examples, ties, layouts, escapes and streaming.

use super::number::{layout, may_tie, tie_partner};
use super::writer::{write_value, Out, FLUSH_BYTES};
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
