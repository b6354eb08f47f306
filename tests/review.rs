//! Integration tests for `quassay review`: the binary on a certificate made in the test from
//! the bundled invented example `example_runs/chain12` (an exact simulation, see its
//! scenario.json). The known answers are the certificate's own half-widths
//! `e_avg + e_shot`: a claim just above the largest is supported (exit 0), one just below is
//! not (exit 3), as docs/method.md §3, "The claim and the confidence split", defines the interval.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::util::{body, quassay, repo, scratch};

/// Copies the example to `dir` and certifies it; returns the certificate's path.
fn certificate(dir: &Path) -> PathBuf {
    for f in ["run.h5", "noise.json"] {
        std::fs::copy(repo().join("example_runs/chain12").join(f), dir.join(f)).unwrap();
    }
    quassay()
        .arg("certify")
        .arg(dir.join("run.h5"))
        .arg("--noise")
        .arg(dir.join("noise.json"))
        .assert()
        .success();
    dir.join("run.cert.json")
}

/// The largest half-width over the observables named (all if `None`) and times ≤ `until`.
fn largest_half_width(body: &Value, only: Option<&str>, until: Option<f64>) -> f64 {
    let times: Vec<f64> = body["run"]["times"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| t.as_f64().unwrap())
        .collect();
    let mut best = 0.0f64;
    for o in body["observables"].as_array().unwrap() {
        if only.is_some_and(|n| o["name"] != n) {
            continue;
        }
        for (k, &t) in times.iter().enumerate() {
            if until.is_some_and(|u| t > u) {
                continue;
            }
            let hw = o["e_avg"][k].as_f64().unwrap() + o["e_shot"][k].as_f64().unwrap();
            best = best.max(hw);
        }
    }
    best
}

#[test]
fn a_claim_just_above_the_certified_error_is_supported_and_just_below_is_not() {
    let dir = scratch();
    let cert = certificate(dir.path());
    let b = body(&cert);
    let hw = largest_half_width(&b, None, None);
    assert!(hw > 0.0);
    let out = quassay()
        .arg("review")
        .arg(&cert)
        .args(["--claim-error", &format!("{}", hw * (1.0 + 1e-9))])
        .assert()
        .success();
    let text = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    assert!(text.contains("yes:"), "{text}");
    // The explanation is there: the claim, what is not covered, the gain.
    for needle in [
        "What is claimed",
        "Decoherence",
        "Gain of the stochastic",
        "simultaneous",
    ] {
        assert!(text.contains(needle), "{needle} missing:\n{text}");
    }
    let out = quassay()
        .arg("review")
        .arg(&cert)
        .args(["--claim-error", &format!("{}", hw * (1.0 - 1e-9))])
        .assert()
        .code(3);
    let text = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    assert!(text.contains("no:") && text.contains("exceeds"), "{text}");

    // One observable up to a time: its own (smaller) largest half-width decides.
    let sub = largest_half_width(&b, Some("Z_6"), Some(0.5));
    assert!(sub < hw);
    let run = |e: f64| {
        quassay()
            .arg("review")
            .arg(&cert)
            .args(["--observable", "Z_6", "--until", "0.5", "--json"])
            .args(["--claim-error", &format!("{e}")])
            .output()
            .unwrap()
    };
    let yes = run(sub * (1.0 + 1e-9));
    assert_eq!(yes.status.code(), Some(0));
    let j: Value = serde_json::from_slice(&yes.stdout).unwrap();
    assert_eq!(j["claim_check"]["supported"], true);
    assert_eq!(j["claim_check"]["points_checked"], 11); // t = 0, 0.05, …, 0.5
    let hw_json = j["claim_check"]["largest_half_width"]["half_width"]
        .as_f64()
        .unwrap();
    assert_eq!(hw_json, sub);
    let no = run(sub * (1.0 - 1e-9));
    assert_eq!(no.status.code(), Some(3));
    let j: Value = serde_json::from_slice(&no.stdout).unwrap();
    assert_eq!(j["claim_check"]["supported"], false);
    assert_eq!(j["claim_check"]["first_excess"]["observable"], "Z_6");
}

#[test]
fn an_altered_certificate_is_refused_and_inputs_are_reproduced() {
    let dir = scratch();
    let cert = certificate(dir.path());
    // With --inputs the body is recomputed, as verify does.
    let out = quassay()
        .arg("review")
        .arg(&cert)
        .arg("--inputs")
        .arg(dir.path())
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(j["reproduces"], true);
    assert!(j["review"]["not_covered"].as_array().unwrap().len() >= 3);
    // Change one certified number: the digest no longer matches (exit 3).
    let mut v: Value = serde_json::from_str(&std::fs::read_to_string(&cert).unwrap()).unwrap();
    v["body"]["observables"][0]["e_avg"][5] = serde_json::json!(0.0);
    std::fs::write(&cert, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    let out = quassay()
        .arg("review")
        .arg(&cert)
        .args(["--claim-error", "10"])
        .assert()
        .code(3);
    let text = String::from_utf8_lossy(&out.get_output().stdout).into_owned();
    assert!(text.contains("altered"), "{text}");
}

#[test]
fn an_unknown_observable_or_a_bad_claim_is_refused() {
    let dir = scratch();
    let cert = certificate(dir.path());
    quassay()
        .arg("review")
        .arg(&cert)
        .args(["--claim-error", "0.1", "--observable", "nope"])
        .assert()
        .code(1);
    quassay()
        .arg("review")
        .arg(&cert)
        .args(["--claim-error", "-1"])
        .assert()
        .code(2);
    quassay()
        .arg("review")
        .arg(&cert)
        .args(["--observable", "Z_6"])
        .assert()
        .code(2);
}

/// Numbers printed for people are short (docs/review.md): every decimal number in the text of
/// `review` has at most five significant digits (a raw double such as 0.050000000000000044 has
/// seventeen), while `--json` keeps the certificate's full precision.
#[test]
fn the_review_text_prints_short_numbers() {
    let dir = scratch();
    let cert = certificate(dir.path());
    let out = quassay().arg("review").arg(&cert).output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    let significant = |token: &str| {
        let mantissa = token.split(['e', 'E']).next().unwrap_or("");
        mantissa
            .chars()
            .filter(char::is_ascii_digit)
            .collect::<String>()
            .trim_start_matches('0')
            .len()
    };
    for token in text.split(|c: char| !(c.is_ascii_digit() || c == '.' || c == 'e' || c == '-')) {
        let token = token.trim_matches(|c| c == '.' || c == '-' || c == 'e');
        if token.contains('.') && token.parse::<f64>().is_ok() {
            assert!(significant(token) <= 5, "{token} in: {text}");
        }
    }
    assert!(text.contains("0.025 of the total 0.05"), "{text}");
    assert!(text.contains("the Bonferroni correction"), "{text}");
    let json = quassay()
        .args(["review", "--json"])
        .arg(&cert)
        .output()
        .unwrap();
    let v: Value = serde_json::from_slice(&json.stdout).unwrap();
    let e_avg = v["review"]["gain"][0]["e_avg"].as_f64().unwrap();
    let b = body(&cert);
    assert!(crate::util::numbers(&b["observables"][0]["e_avg"]).contains(&e_avg));
}
