//! The HTML report of a certificate: one self-contained page (inline SVG, no script, nothing
//! fetched) with, per observable, the averaged trace and its intervals, the error budget over
//! time and the realization-to-realization spread against the allowed one, then the fidelity
//! lower bound of the run.
//!
//! It is built from the certificate's body alone, so any archived certificate can be reported
//! on; members the figures need are read here and every missing or malformed one is reported,
//! with its JSON pointer, before anything is drawn. One file per figure kind draws it.

mod budget;
mod fidelity;
mod plot;
mod spread;
mod trace;

use std::fmt::Write as _;
use std::path::Path;

use serde_json::Value;

use crate::certificate::document::body_digest;
use crate::error::{Error, InputKind, Problem, Result};

/// The figure kinds drawn for every observable, by their `class` in the page.
pub const OBSERVABLE_FIGURES: [&str; 3] = ["trace", "budget", "spread"];

/// One observable's columns, as in `body.observables[i]` (an `"unbounded"` entry is +∞).
#[derive(Debug, Clone)]
pub(crate) struct ObservableColumns {
    pub name: String,
    pub description: String,
    pub spectrum: [f64; 2],
    pub mean: Vec<f64>,
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
    pub e_wc: Vec<f64>,
    pub e_sys: Vec<f64>,
    pub e_bias: Vec<f64>,
    pub fluctuation: Vec<f64>,
    /// Format 1.4: the fluctuation term static noise would give (`fluctuation_static`).
    pub fluctuation_static: Option<Vec<f64>>,
    pub e_avg: Vec<f64>,
    pub e_shot: Vec<f64>,
    pub claim: String,
    /// Format 1.1: the data statement's interval and the certified intersection, per time
    /// (NaN where the two statements are disjoint).
    pub data: Option<DataBands>,
    /// Format 1.3: the device-error terms per time, each when the certificate has it.
    pub device: DeviceColumns,
}

/// The device-error terms of one observable (format 1.3): `e_incoherent`, `e_preparation`
/// and `e_readout`, each `None` when absent (or, for the readout, not covered).
#[derive(Debug, Clone, Default)]
pub(crate) struct DeviceColumns {
    pub incoherent: Option<Vec<f64>>,
    pub preparation: Option<Vec<f64>>,
    pub readout: Option<Vec<f64>>,
}

/// The data statement's bands of one observable (format 1.1).
#[derive(Debug, Clone)]
pub(crate) struct DataBands {
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
    pub certified_lower: Vec<f64>,
    pub certified_upper: Vec<f64>,
    pub method: String,
}

/// An optional column of numbers or nulls (null, or anything else, read as NaN), of the
/// run's length; `None` when absent or of another length.
fn optional_column(body: &Value, ptr: &str, n_times: usize) -> Option<Vec<f64>> {
    let a = body.pointer(ptr)?.as_array()?;
    (a.len() == n_times).then(|| a.iter().map(|x| x.as_f64().unwrap_or(f64::NAN)).collect())
}

fn data_bands(body: &Value, p: &str, n_times: usize) -> Option<DataBands> {
    let col = |name: &str| optional_column(body, &format!("{p}/{name}"), n_times);
    Some(DataBands {
        lower: col("data_statement/lower")?,
        upper: col("data_statement/upper")?,
        certified_lower: col("certified_lower")?,
        certified_upper: col("certified_upper")?,
        method: body
            .pointer(&format!("{p}/data_statement/method/0"))
            .and_then(Value::as_str)
            .unwrap_or("")
            .replace('_', "-"),
    })
}

/// The variance check of one observable, as in `body.checks.observables[i].variance`.
#[derive(Debug, Clone)]
pub(crate) struct SpreadColumns {
    pub sample_variance: Vec<f64>,
    pub v_noise: Vec<f64>,
    pub v_shot: Vec<f64>,
    pub rejected: Vec<bool>,
    pub shot_approximate: bool,
}

/// Everything the report shows.
#[derive(Debug, Clone)]
pub(crate) struct ReportData {
    pub run_id: String,
    pub time_unit: String,
    pub times: Vec<f64>,
    pub confidence: f64,
    pub statement: String,
    pub digest: String,
    pub verdict: String,
    pub observables: Vec<ObservableColumns>,
    /// Per observable: the spread columns, or why the certificate has none.
    pub spreads: Vec<std::result::Result<SpreadColumns, String>>,
    /// Per observable: the ideal-model trace when the run gave one.
    pub ideals: Vec<Option<Vec<f64>>>,
    pub f_low: Vec<f64>,
    pub vacuous: Vec<bool>,
}

/// Reads members of the body, collecting every problem.
struct Reader<'a> {
    body: &'a Value,
    problems: Vec<Problem>,
    n_times: usize,
}

impl<'a> Reader<'a> {
    fn get(&mut self, ptr: &str, what: &str) -> Option<&'a Value> {
        let v = self.body.pointer(ptr);
        if v.is_none() {
            self.problems.push(Problem::new(
                format!("/body{ptr}"),
                format!("is missing; a certificate body has {what} here (docs/certificate.md)"),
            ));
        }
        v
    }

    fn string(&mut self, ptr: &str) -> String {
        match self.get(ptr, "a string") {
            Some(Value::String(s)) => s.clone(),
            Some(_) => {
                self.bad(ptr, "must be a string");
                String::new()
            }
            None => String::new(),
        }
    }

    fn number(&mut self, ptr: &str) -> f64 {
        match self.get(ptr, "a number").map(Value::as_f64) {
            Some(Some(x)) => x,
            Some(None) => {
                self.bad(ptr, "must be a number");
                f64::NAN
            }
            None => f64::NAN,
        }
    }

    fn bad(&mut self, ptr: &str, message: &str) {
        self.problems.push(Problem::new(
            format!("/body{ptr}"),
            format!("{message}; this is not a body written by quassay certify"),
        ));
    }

    /// A column of numbers (or `"unbounded"`, read as +∞) with one entry per recorded time.
    fn column(&mut self, ptr: &str) -> Vec<f64> {
        let Some(v) = self.get(ptr, "an array with one number per recorded time") else {
            return vec![f64::NAN; self.n_times];
        };
        let parsed: Option<Vec<f64>> = v.as_array().and_then(|a| {
            a.iter()
                .map(|x| match x {
                    Value::String(s) if s == "unbounded" => Some(f64::INFINITY),
                    _ => x.as_f64(),
                })
                .collect()
        });
        match parsed {
            Some(c) if c.len() == self.n_times => c,
            Some(c) => {
                let m = format!(
                    "has {} entries but the run records {} times",
                    c.len(),
                    self.n_times
                );
                self.bad(ptr, &m);
                vec![f64::NAN; self.n_times]
            }
            None => {
                self.bad(ptr, "must be an array of numbers or \"unbounded\"");
                vec![f64::NAN; self.n_times]
            }
        }
    }

    fn bools(&mut self, ptr: &str) -> Vec<bool> {
        let v = self.get(ptr, "an array with one boolean per recorded time");
        match v.and_then(Value::as_array) {
            Some(a) if a.len() == self.n_times && a.iter().all(Value::is_boolean) => {
                a.iter().map(|b| b.as_bool() == Some(true)).collect()
            }
            Some(_) => {
                self.bad(ptr, "must be an array of booleans, one per recorded time");
                vec![false; self.n_times]
            }
            None => vec![false; self.n_times],
        }
    }
}

/// Reads what the report needs from a certificate body; `file` names the certificate in errors.
pub(crate) fn read_body(body: &Value, file: &Path) -> Result<ReportData> {
    let mut r = Reader {
        body,
        problems: Vec::new(),
        n_times: 0,
    };
    let times = match body.pointer("/run/times").and_then(Value::as_array) {
        Some(a) => a.iter().map(|x| x.as_f64().unwrap_or(f64::NAN)).collect(),
        None => {
            r.bad("/run/times", "must be an array of the recorded times");
            Vec::new()
        }
    };
    r.n_times = times.len();
    let run_id = r.string("/run/run_id");
    let time_unit = r.string("/run/time_unit");
    let confidence = r.number("/options/confidence");
    let statement = r.string("/options/statement");
    let verdict = body
        .pointer("/verdict/text")
        .and_then(Value::as_str)
        .unwrap_or("")
        .to_string();
    let n_obs = match r.get("/observables", "an array of observables") {
        Some(Value::Array(a)) => a.len(),
        Some(_) => {
            r.bad("/observables", "must be an array");
            0
        }
        None => 0,
    };
    let checks_status = body
        .pointer("/checks/status")
        .and_then(Value::as_str)
        .unwrap_or("absent")
        .to_string();
    let mut observables = Vec::new();
    let mut spreads = Vec::new();
    let mut ideals = Vec::new();
    for i in 0..n_obs {
        let p = format!("/observables/{i}");
        let name = r.string(&format!("{p}/name"));
        let spectrum = [
            r.number(&format!("{p}/spectrum/0")),
            r.number(&format!("{p}/spectrum/1")),
        ];
        let claim = body
            .pointer("/claim/per_observable")
            .and_then(Value::as_array)
            .and_then(|a| {
                a.iter()
                    .find(|c| c["observable"].as_str() == Some(name.as_str()))
            })
            .and_then(|c| c["text"].as_str())
            .unwrap_or("")
            .to_string();
        observables.push(ObservableColumns {
            description: body
                .pointer(&format!("{p}/description"))
                .and_then(Value::as_str)
                .unwrap_or("")
                .to_string(),
            spectrum,
            mean: r.column(&format!("{p}/mean")),
            lower: r.column(&format!("{p}/lower")),
            upper: r.column(&format!("{p}/upper")),
            e_wc: r.column(&format!("{p}/e_wc")),
            e_sys: r.column(&format!("{p}/e_sys")),
            e_bias: r.column(&format!("{p}/e_bias")),
            fluctuation: r.column(&format!("{p}/fluctuation")),
            e_avg: r.column(&format!("{p}/e_avg")),
            e_shot: r.column(&format!("{p}/e_shot")),
            claim,
            data: data_bands(body, &p, times.len()),
            fluctuation_static: optional_column(
                body,
                &format!("{p}/fluctuation_static"),
                times.len(),
            ),
            device: DeviceColumns {
                incoherent: optional_column(body, &format!("{p}/e_incoherent"), times.len()),
                preparation: optional_column(body, &format!("{p}/e_preparation"), times.len()),
                readout: optional_column(body, &format!("{p}/e_readout"), times.len()),
            },
            name: name.clone(),
        });
        // The checks of this observable, found by name (the order is the same, but a name
        // is what a reader of the body would match on).
        let checked = body
            .pointer("/checks/observables")
            .and_then(Value::as_array)
            .and_then(|a| {
                a.iter()
                    .position(|c| c["name"].as_str() == Some(name.as_str()))
            });
        let (spread, ideal) = match checked {
            None => (
                Err(format!(
                    "not in this certificate: its consistency checks are {}",
                    checks_status.replace('_', " ")
                )),
                None,
            ),
            Some(j) => {
                let q = format!("/checks/observables/{j}");
                let var = &body["checks"]["observables"][j]["variance"];
                let spread = if var.get("sample_variance").is_some() {
                    Ok(SpreadColumns {
                        sample_variance: r.column(&format!("{q}/variance/sample_variance")),
                        v_noise: r.column(&format!("{q}/variance/v_noise")),
                        v_shot: r.column(&format!("{q}/variance/v_shot")),
                        rejected: r.bools(&format!("{q}/variance/rejected")),
                        shot_approximate: var["v_shot_approximate"].as_bool() == Some(true),
                    })
                } else {
                    Err(
                        "not in this certificate: the variance test was not possible \
                         (fewer than two realizations)"
                            .to_string(),
                    )
                };
                let ideal = body["checks"]["observables"][j]["ideal_reference"]
                    .get("ideal")
                    .map(|_| r.column(&format!("{q}/ideal_reference/ideal")));
                (spread, ideal)
            }
        };
        spreads.push(spread);
        ideals.push(ideal);
    }
    let f_low = r.column("/fidelity/f_low");
    let vacuous = r.bools("/fidelity/vacuous");
    if !r.problems.is_empty() {
        return Err(Error::Input {
            kind: InputKind::Certificate,
            file: file.to_path_buf(),
            problems: r.problems,
        });
    }
    Ok(ReportData {
        run_id,
        time_unit,
        times,
        confidence,
        statement,
        digest: body_digest(body).unwrap_or_default(),
        verdict,
        observables,
        spreads,
        ideals,
        f_low,
        vacuous,
    })
}

/// Escapes text for HTML element content and attribute values.
pub(crate) fn escape(text: &str) -> String {
    let mut s = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => s.push_str("&amp;"),
            '<' => s.push_str("&lt;"),
            '>' => s.push_str("&gt;"),
            '"' => s.push_str("&quot;"),
            '\'' => s.push_str("&#39;"),
            _ => s.push(c),
        }
    }
    s
}

const STYLE: &str = "body{font-family:sans-serif;color:#000;background:#fff;max-width:1000px;\
margin:1.5em auto;padding:0 1em;line-height:1.4}\
h1{font-size:1.6em}h2{font-size:1.3em;border-top:2px solid #000;padding-top:.6em;margin-top:2em}\
figure{margin:1.2em 0;break-inside:avoid;page-break-inside:avoid}\
figure svg{width:100%;height:auto;display:block}\
figcaption{font-size:.95em;margin-top:.3em}\
p.missing{border:1px dashed #000;padding:.6em}\
code{font-size:.95em}dl{display:grid;grid-template-columns:max-content auto;gap:.2em 1em}\
dt{font-weight:bold}dd{margin:0}\
@media print{body{max-width:none;margin:0}h2{break-before:auto}}";

/// A figure element: class `kind`, the observable's name, the SVG, a caption.
fn push_figure(html: &mut String, kind: &str, observable: &str, svg: &str, caption: &str) {
    let _ = write!(
        html,
        "<figure class=\"{kind}\" data-observable=\"{}\">\n{svg}\n<figcaption>{caption}</figcaption>\n</figure>\n",
        escape(observable)
    );
}

fn internal(what: &str, e: plot::DrawError) -> Error {
    Error::Options(format!("internal: drawing the {what} failed: {e}"))
}

/// The whole report page for a certificate body; `file` names the certificate in errors.
pub fn report_html(body: &Value, file: &Path) -> Result<String> {
    let d = read_body(body, file)?;
    let mut html = String::new();
    let title = format!("quassay report: run {}", d.run_id);
    let _ = write!(
        html,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n<h1>{}</h1>\n",
        escape(&title),
        escape(&title)
    );
    let _ = write!(
        html,
        "<dl>\n<dt>certificate digest</dt><dd><code>{}</code> (SHA-256 of the RFC 8785 form of the body)</dd>\n\
         <dt>claim</dt><dd>confidence {}, {}</dd>\n<dt>consistency of data and noise record</dt><dd>{}</dd>\n\
         <dt>time unit</dt><dd>{}</dd>\n</dl>\n\
         <p>Every figure is drawn from the certificate's body alone; the numbers it shows are \
         the body's. Curves are told apart by dash pattern and marker, bands by shade.</p>\n",
        escape(&d.digest),
        d.confidence,
        escape(&d.statement),
        escape(if d.verdict.is_empty() { "not stated" } else { &d.verdict }),
        escape(&d.time_unit),
    );
    for (i, o) in d.observables.iter().enumerate() {
        let _ = write!(
            html,
            "<section class=\"observable\">\n<h2>{}",
            escape(&o.name)
        );
        if !o.description.is_empty() {
            let _ = write!(html, " <small>({})</small>", escape(&o.description));
        }
        html.push_str("</h2>\n");
        if !o.claim.is_empty() {
            let _ = writeln!(html, "<p>{}</p>", escape(&o.claim));
        }
        let ideal = d.ideals.get(i).and_then(Option::as_ref);
        let (svg, caption) = trace::figure(&d, o, ideal).map_err(|e| internal("trace", e))?;
        push_figure(&mut html, "trace", &o.name, &svg, &caption);
        let (svg, caption) = budget::figure(&d, o).map_err(|e| internal("error budget", e))?;
        push_figure(&mut html, "budget", &o.name, &svg, &caption);
        match d.spreads.get(i) {
            Some(Ok(s)) => {
                let (svg, caption) =
                    spread::figure(&d, s).map_err(|e| internal("spread figure", e))?;
                push_figure(&mut html, "spread", &o.name, &svg, &caption);
            }
            Some(Err(why)) => {
                let _ = writeln!(
                    html,
                    "<p class=\"missing spread\">Observed against allowed standard deviation: {}.</p>",
                    escape(why)
                );
            }
            None => {}
        }
        html.push_str("</section>\n");
    }
    html.push_str("<section class=\"run\">\n<h2>Fidelity</h2>\n");
    let (svg, caption) = fidelity::figure(&d).map_err(|e| internal("fidelity figure", e))?;
    push_figure(&mut html, "fidelity", "", &svg, &caption);
    html.push_str("</section>\n</body>\n</html>\n");
    Ok(html)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn body() -> Value {
        let col = |v: f64| json!([v, v, v]);
        json!({
            "run": {"run_id": "invented-3", "time_unit": "ms", "times": [0.0, 0.5, 1.0]},
            "options": {"confidence": 0.9, "statement": "pointwise"},
            "verdict": {"text": "consistent <really>"},
            "claim": {"per_observable": [{"observable": "Z_0", "text": "a claim"}]},
            "observables": [{
                "name": "Z_0", "description": "Z & I", "spectrum": [-1.0, 1.0],
                "mean": [1.0, 0.5, 0.0], "lower": [0.9, 0.3, -0.3], "upper": [1.1, 0.7, 0.3],
                "e_wc": [0.0, 0.5, "unbounded"], "e_sys": col(0.0), "e_bias": col(0.01),
                "fluctuation": [0.0, 0.1, "unbounded"], "e_avg": [0.0, 0.1, 0.2],
                "e_shot": col(0.1)
            }],
            "fidelity": {"f_low": [1.0, 0.7, 0.0], "vacuous": [false, false, true]},
            "checks": {"status": "not_performed", "reason": "old"}
        })
    }

    #[test]
    fn a_body_reads_with_unbounded_entries_as_infinity() {
        let d = read_body(&body(), Path::new("c.json")).unwrap();
        assert_eq!(d.observables[0].e_wc[2], f64::INFINITY);
        assert_eq!(d.vacuous, [false, false, true]);
        assert!(d.spreads[0]
            .as_ref()
            .unwrap_err()
            .contains("not in this certificate"));
    }

    #[test]
    fn every_missing_member_is_reported_with_its_pointer() {
        let mut b = body();
        b["observables"][0].as_object_mut().unwrap().remove("mean");
        b["observables"][0]["e_avg"] = json!([0.0]);
        b["fidelity"]["f_low"] = json!("x");
        let e = read_body(&b, Path::new("c.json")).unwrap_err();
        let paths: Vec<&str> = e.problems().iter().map(|p| p.path.as_str()).collect();
        assert_eq!(
            paths,
            [
                "/body/observables/0/mean",
                "/body/observables/0/e_avg",
                "/body/fidelity/f_low"
            ]
        );
        assert!(e
            .to_string()
            .contains("certificate 'c.json' has 3 problems"));
    }

    #[test]
    fn the_page_escapes_text_and_says_what_is_missing() {
        let html = report_html(&body(), Path::new("c.json")).unwrap();
        assert!(html.contains("consistent &lt;really&gt;"));
        assert!(html.contains("(Z &amp; I)"));
        assert_eq!(html.matches("<svg").count(), 3);
        assert!(html.contains("class=\"missing spread\""));
        assert!(!html.contains("http"));
        assert!(!html.contains("<script"));
    }
}
