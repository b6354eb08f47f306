//! Fuzz target `certificate`: arbitrary bytes through the certificate reader, then through
//! everything that reads a body without I/O.
//!
//! `Certificate::from_bytes` (what `Certificate::read` does after reading the file) must
//! return a certificate or problems. On a certificate: the digest check, review's reading of
//! the body, its explanation and claim check, and the HTML report. These run whether or not
//! the digest matches, since anyone can recompute a digest for a hand-made body. None may
//! panic; the digest check must agree with a fresh digest of the body.

#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use quassay::certificate::document::{body_digest, Certificate};
use quassay::certificate::review::{check_claim, explain, gains, read_view};
use quassay::outputs::report::report_html;

fuzz_target!(|data: &[u8]| {
    let cert = match Certificate::from_bytes(data) {
        Ok(cert) => cert,
        Err(problems) => {
            assert!(!problems.is_empty(), "an error without a problem");
            return;
        }
    };
    let matches = cert.digest_matches();
    assert_eq!(
        matches,
        body_digest(&cert.body).as_deref() == Some(cert.digest.as_str())
    );
    if let Ok(view) = read_view(&cert.body) {
        let explanation = explain(&cert.body, &view);
        let _ = explanation.to_json();
        let _ = explanation.to_text(&view.time_unit);
        let _ = gains(&view);
        for claimed in [0.0, 1e-3, 1.0] {
            if let Ok(answer) = check_claim(&view, claimed, None, None) {
                let _ = answer.to_json();
            }
        }
        let first = view.observables.first().map(|o| o.name.clone());
        let until = view.times.first().copied();
        let _ = check_claim(&view, 0.5, first.as_deref(), until);
    }
    let _ = report_html(&cert.body, Path::new("fuzz.cert.json"));
});
