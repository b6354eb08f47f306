//! `quassay verify`: does a certificate reproduce from its archived inputs, byte for byte?

use serde_json::json;

use super::args::VerifyArgs;
use super::{print_stdout, Outcome};
use crate::certificate::verify::verify;

/// Runs `verify`: exit 0 if the certificate reproduces, 3 if it does not or was altered.
pub fn run(args: &VerifyArgs) -> crate::Result<Outcome> {
    let report = verify(&args.certificate, args.inputs.as_deref())?;
    let text = if args.json {
        let mut s = serde_json::to_string_pretty(&json!({
            "certificate": args.certificate.display().to_string(),
            "reproduces": report.reproduces,
            "repacked": report.repacked,
            "steps": report.lines,
        }))
        .unwrap_or_default();
        s.push('\n');
        s
    } else {
        let mut s = String::new();
        for l in &report.lines {
            s.push_str(l);
            s.push('\n');
        }
        s.push_str(if report.reproduces {
            "verified: the certificate reproduces from its inputs\n"
        } else {
            "not verified\n"
        });
        s
    };
    print_stdout(&text)?;
    Ok(if report.reproduces {
        Outcome::Success
    } else {
        Outcome::Negative
    })
}
