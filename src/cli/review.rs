//! `quassay review`: a certificate explained in plain language for a referee.
//!
//! First the digest (exit 3 if the body was altered); with `--inputs DIR` the whole body is
//! recomputed as `verify` does (exit 3 if it does not reproduce). Then the explanation of
//! [`crate::certificate::review`]. With `--claim-error E` the answer is whether the
//! certificate supports that error: exit 0 for yes, 3 for no, with the numbers.

use std::path::PathBuf;

use serde_json::json;

use super::{print_stdout, Outcome};
use crate::certificate::document::Certificate;
use crate::certificate::review::{check_claim, explain, read_view};
use crate::certificate::verify::verify;
use crate::{Error, InputKind};

/// The command line of `quassay review`.
#[derive(Debug, clap::Args)]
pub struct ReviewArgs {
    /// The certificate (JSON, format quassay-certificate v1).
    pub certificate: PathBuf,
    /// Also reproduce the certificate from the inputs in this folder (as `verify --inputs`).
    #[arg(long, value_name = "DIR")]
    pub inputs: Option<PathBuf>,
    /// Test whether the certificate supports this error (half-width of the interval).
    #[arg(long, value_name = "E", value_parser = positive)]
    pub claim_error: Option<f64>,
    /// Restrict --claim-error to this observable.
    #[arg(long, value_name = "NAME", requires = "claim_error")]
    pub observable: Option<String>,
    /// Restrict --claim-error to recorded times at or before T (the run's time unit).
    #[arg(long, value_name = "T", requires = "claim_error", value_parser = finite)]
    pub until: Option<f64>,
    /// Print the review as JSON.
    #[arg(long)]
    pub json: bool,
}

fn finite(text: &str) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        _ => Err(format!("'{text}' is not a finite number")),
    }
}

fn positive(text: &str) -> Result<f64, String> {
    let x = finite(text)?;
    if x > 0.0 {
        Ok(x)
    } else {
        Err(format!("{x} must be positive"))
    }
}

/// Runs `review`.
pub fn run(args: &ReviewArgs) -> crate::Result<Outcome> {
    // A FIFO or device given as the certificate would block or never end the read.
    crate::inputs::regular::check_regular(
        &args.certificate,
        crate::certificate::verify::CERTIFICATE,
    )?;
    let cert = Certificate::read(&args.certificate)?;
    let mut steps = Vec::new();
    let digest_ok = cert.digest_matches();
    steps.push(if digest_ok {
        format!("digest {} matches the body", cert.digest)
    } else {
        "the digest does not match the body: the certificate was altered after it was issued"
            .to_string()
    });
    let mut reproduces = None;
    if digest_ok {
        if let Some(dir) = &args.inputs {
            let rep = verify(&args.certificate, Some(dir))?;
            // verify's own first step is the digest check: its lines replace ours.
            steps = rep.lines.clone();
            reproduces = Some(rep.reproduces);
        }
    }
    let intact = digest_ok && reproduces != Some(false);
    if !intact {
        let text = if args.json {
            let mut s = serde_json::to_string_pretty(&json!({
                "certificate": args.certificate.display().to_string(),
                "digest_matches": digest_ok,
                "reproduces": reproduces,
                "steps": steps,
            }))
            .unwrap_or_default();
            s.push('\n');
            s
        } else {
            let mut s = steps.join("\n");
            s.push_str("\nnot reviewed: the certificate is not the one that was issued\n");
            s
        };
        print_stdout(&text)?;
        return Ok(Outcome::Negative);
    }
    let bad = |problems| Error::Input {
        kind: InputKind::Certificate,
        file: args.certificate.clone(),
        problems,
    };
    let view = read_view(&cert.body).map_err(bad)?;
    let explanation = explain(&cert.body, &view);
    let answer = match args.claim_error {
        Some(e) => Some(
            check_claim(&view, e, args.observable.as_deref(), args.until)
                .map_err(Error::Options)?,
        ),
        None => None,
    };
    let text = if args.json {
        let mut s = serde_json::to_string_pretty(&json!({
            "certificate": args.certificate.display().to_string(),
            "digest_matches": true,
            "reproduces": reproduces,
            "steps": steps,
            "review": explanation.to_json(),
            "claim_check": answer.as_ref().map(|a| a.to_json()),
        }))
        .unwrap_or_default();
        s.push('\n');
        s
    } else {
        let mut s = String::new();
        for l in &steps {
            s.push_str(l);
            s.push('\n');
        }
        if reproduces.is_none() {
            s.push_str(
                "(the body was not recomputed from the inputs; give --inputs DIR to do so)\n",
            );
        }
        s.push('\n');
        s.push_str(&explanation.to_text(&view.time_unit));
        if let Some(a) = &answer {
            s.push_str(&format!("\nclaimed error {}: {}\n", a.claimed, a.reason));
        }
        s
    };
    print_stdout(&text)?;
    Ok(match answer {
        Some(a) if !a.supported => Outcome::Negative,
        _ => Outcome::Success,
    })
}
