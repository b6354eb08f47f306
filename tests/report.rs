//! `quassay report` and `certify --report`: the HTML report of a certificate, opened in a real
//! headless browser.
//!
//! Outside references: the page is rendered by Debian's `chromium` (a real browser, not our
//! code) and its screenshot decoded with the `png` crate (PNG, ISO/IEC 15948).

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

use crate::util::{body, entries, quassay, repo, scratch};

/// Where `.ci/run` installs Debian's chromium (`apt-get install -y chromium`).
const CHROMIUM: &str = "/usr/bin/chromium";

/// Copies the bundled invented chain example into `dir` and certifies it with `--report`;
/// returns (certificate, report).
fn certify_with_report(dir: &Path) -> (PathBuf, PathBuf) {
    for f in ["run.h5", "noise.json"] {
        std::fs::copy(repo().join("example_runs/chain12").join(f), dir.join(f)).unwrap();
    }
    let (cert, report) = (dir.join("run.cert.json"), dir.join("run.html"));
    quassay()
        .arg("certify")
        .arg(dir.join("run.h5"))
        .arg("--noise")
        .arg(dir.join("noise.json"))
        .arg("--report")
        .arg(&report)
        .assert()
        .success();
    (cert, report)
}

/// The page is self-contained (nothing a browser would fetch, no script) and holds one SVG
/// figure per observable and kind, plus the fidelity figure.
#[test]
fn the_report_is_self_contained_with_one_figure_per_observable_and_kind() {
    let dir = scratch();
    let (cert, report) = certify_with_report(dir.path());
    let html = std::fs::read_to_string(&report).unwrap();
    for banned in [
        "http:", "https:", "src=", "<script", "<link", "url(", "@import",
    ] {
        assert!(!html.contains(banned), "the report holds {banned:?}");
    }
    let names: Vec<String> = body(&cert)["observables"]
        .as_array()
        .unwrap()
        .iter()
        .map(|o| o["name"].as_str().unwrap().to_string())
        .collect();
    assert_eq!(names.len(), 3);
    assert_eq!(html.matches("<svg").count(), 3 * names.len() + 1);
    assert_eq!(html.matches("</svg>").count(), 3 * names.len() + 1);
    for name in &names {
        for kind in ["trace", "budget", "spread"] {
            let tag = format!("<figure class=\"{kind}\" data-observable=\"{name}\">");
            assert_eq!(html.matches(&tag).count(), 1, "{tag}");
        }
    }
    assert_eq!(html.matches("<figure class=\"fidelity\"").count(), 1);
    // Axes carry the run's time unit (µs for "us").
    assert_eq!(
        html.matches(">\ntime t (µs)\n</text>").count(),
        3 * names.len() + 1
    );
}

/// `quassay report` gives the page certify wrote, byte for byte (it depends on the body only),
/// and keeps an existing file unless --force.
#[test]
fn report_reproduces_the_certify_page_and_refuses_to_overwrite() {
    let dir = scratch();
    let (cert, report) = certify_with_report(dir.path());
    let again = dir.path().join("again.html");
    quassay()
        .arg("report")
        .arg(&cert)
        .arg("-o")
        .arg(&again)
        .assert()
        .success();
    assert_eq!(
        std::fs::read(&again).unwrap(),
        std::fs::read(&report).unwrap()
    );
    std::fs::write(&again, b"keep").unwrap();
    quassay()
        .arg("report")
        .arg(&cert)
        .arg("-o")
        .arg(&again)
        .assert()
        .code(1)
        .stderr(predicates::str::contains("--force"));
    assert_eq!(std::fs::read(&again).unwrap(), b"keep");
    quassay()
        .args(["report", "--force", "-o"])
        .arg(&again)
        .arg(&cert)
        .assert()
        .success();
    assert_eq!(
        std::fs::read(&again).unwrap(),
        std::fs::read(&report).unwrap()
    );
    // certify --report also refuses an existing report, before writing anything.
    std::fs::remove_file(&cert).unwrap();
    quassay()
        .arg("certify")
        .arg(dir.path().join("run.h5"))
        .arg("--noise")
        .arg(dir.path().join("noise.json"))
        .arg("--report")
        .arg(&report)
        .assert()
        .code(1);
    assert!(!cert.exists());
}

/// A body without a member the figures need: exit 1 naming the JSON pointer, nothing written.
#[test]
fn a_body_missing_a_column_is_reported_by_its_pointer() {
    let dir = scratch();
    let (cert, _) = certify_with_report(dir.path());
    let mut v: Value = serde_json::from_str(&std::fs::read_to_string(&cert).unwrap()).unwrap();
    v["body"]["observables"][1]
        .as_object_mut()
        .unwrap()
        .remove("upper");
    let broken = dir.path().join("broken.cert.json");
    std::fs::write(&broken, serde_json::to_string(&v).unwrap()).unwrap();
    let before = entries(dir.path());
    quassay()
        .arg("report")
        .arg(&broken)
        .arg("-o")
        .arg(dir.path().join("broken.html"))
        .assert()
        .code(1)
        .stderr(predicates::str::contains(
            "/body/observables/1/upper: is missing",
        ));
    assert_eq!(entries(dir.path()), before);
}

/// Counts the distinct RGBA values of a decoded PNG (up to 3: "not blank" needs 2).
fn distinct_colours(png_path: &Path) -> (u32, u32, usize) {
    let decoder = png::Decoder::new(std::io::BufReader::new(
        std::fs::File::open(png_path).unwrap(),
    ));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    let bytes = &buf[..info.buffer_size()];
    let px = info.line_size / info.width as usize;
    let mut seen: Vec<&[u8]> = Vec::new();
    for p in bytes.chunks_exact(px) {
        if !seen.contains(&p) {
            seen.push(p);
            if seen.len() > 2 {
                break;
            }
        }
    }
    (info.width, info.height, seen.len())
}

/// The report opened in headless chromium: the screenshot exists and is not one colour.
///
/// CI (`CI` set, as `.ci/run` runs) installs chromium and this test FAILS there without it.
/// Locally, with `CI` unset and no chromium, it is skipped with a note on standard error.
#[test]
fn the_report_renders_in_a_headless_browser() {
    if !Path::new(CHROMIUM).exists() {
        assert!(
            std::env::var_os("CI").is_none(),
            "{CHROMIUM} is missing; CI must install it (apt-get install -y chromium)"
        );
        eprintln!("skipped: {CHROMIUM} is not installed and CI is unset");
        return;
    }
    let dir = scratch();
    let (_, report) = certify_with_report(dir.path());
    let profile = dir.path().join("profile");
    let shot = dir.path().join("shot.png");
    let out = Command::new(CHROMIUM)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .arg(format!("--screenshot={}", shot.display()))
        .arg("--window-size=1200,3000")
        .arg(format!("file://{}", report.display()))
        .output()
        .unwrap();
    assert!(
        shot.exists(),
        "no screenshot; chromium said: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let (w, h, colours) = distinct_colours(&shot);
    assert_eq!((w, h), (1200, 3000));
    assert!(colours >= 2, "the screenshot is blank (one colour)");
}
