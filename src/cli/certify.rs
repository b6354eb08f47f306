//! `quassay certify`: bounds and certificate for one run, and a compact summary table.
//!
//! Several runs, or folders of runs, go to [`super::batch`] (the choice is made in
//! [`super::main`]), which certifies each through `certify_one` as a single run is certified
//! here; this module does not depend on the batch.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use serde_json::{json, Value};

use super::args::CertifyArgs;
use super::{print_stdout, Outcome};
use crate::bounds::confidence::Simultaneity;
use crate::bounds::device::ReadoutTerm;
use crate::certificate::body::CertifyOptions;
use crate::certificate::certify::{compute_body, Computed};
use crate::certificate::document::{envelope_now, Certificate};
use crate::certificate::record::recorded_name;
use crate::outputs::atomic::check_free;

/// The default certificate path: `RUN.cert.json` beside the run (`run.h5` → `run.cert.json`).
pub fn default_output(run: &Path) -> PathBuf {
    let stem = run
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "run".into());
    run.with_file_name(format!("{stem}.cert.json"))
}

/// The default report path for `--reports`: `RUN.report.html` beside the run.
pub fn default_report(run: &Path) -> PathBuf {
    let stem = run
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "run".into());
    run.with_file_name(format!("{stem}.report.html"))
}

/// A short note on standard error while the work runs, only when it is a terminal.
pub(super) struct Progress(pub(super) bool);

impl Progress {
    pub(super) fn say(&self, what: &str) {
        if self.0 {
            eprint!("\r\x1b[2Kcertify: {what}");
        }
    }
    pub(super) fn done(&self) {
        if self.0 {
            eprint!("\r\x1b[2K");
        }
    }
}

/// The library's options from the command line.
pub(super) fn options_of(args: &CertifyArgs) -> CertifyOptions {
    CertifyOptions {
        confidence: args.confidence,
        simultaneity: if args.pointwise {
            Simultaneity::Pointwise
        } else {
            Simultaneity::Simultaneous
        },
        check_level: args.check_level,
        data_share: args.data_share,
    }
}

/// One run to certify: its inputs, where its outputs go, and how.
pub(super) struct Job<'a> {
    pub run: &'a Path,
    pub noise: &'a Path,
    pub output: &'a Path,
    pub report: Option<&'a Path>,
    pub options: &'a CertifyOptions,
    pub force: bool,
    /// Record the host name and the command line as typed in the envelope.
    pub full_envelope: bool,
}

/// A certificate written, with what produced it and the notes for the summary.
pub(super) struct Certified {
    pub cert: Certificate,
    pub computed: Computed,
    pub notes: Vec<String>,
}

impl Certified {
    /// Whether the data are consistent with the record (exit 0) or not (exit 3).
    pub fn outcome(&self) -> Outcome {
        if self.computed.checks.consistent() {
            Outcome::Success
        } else {
            Outcome::Negative
        }
    }
}

/// Certifies one run: computes the body, writes the certificate (and the report), and returns
/// them. Nothing is printed on standard output.
pub(super) fn certify_one(job: &Job, progress: &Progress) -> crate::Result<Certified> {
    // Refuse early, before any work, if the certificate exists; checked again at the rename.
    check_free(job.output, job.force)?;
    if let Some(report) = job.report {
        check_free(report, job.force)?;
    }
    progress.say("reading and hashing the inputs, computing the bounds");
    let (run_name, run_below) = recorded_name(job.run, job.output);
    let (noise_name, noise_below) = recorded_name(job.noise, job.output);
    let computed = compute_body(job.run, job.noise, run_name, noise_name, job.options);
    progress.done();
    let mut computed = computed?;
    // The body moves into the certificate (no copy: it can hold millions of numbers) and is
    // streamed to the file while its digest is computed on another thread.
    let cert = crate::outputs::certificate_file::seal_and_write(
        std::mem::take(&mut computed.body),
        envelope_now(job.full_envelope),
        job.output,
        job.force,
    )?;
    if let Some(report) = job.report {
        super::report::write_report(&cert, job.output, report, job.force)?;
    }
    let mut notes = Vec::new();
    if !(run_below && noise_below) {
        notes.push(
            "an input is not inside the certificate's folder, so it is recorded by its file name: \
             verify with --inputs DIR, DIR holding the inputs"
                .to_string(),
        );
    }
    Ok(Certified {
        cert,
        computed,
        notes,
    })
}

/// The record beside `run`: `RUN.noise.json`, else `noise.json` in the run's folder; the
/// message says which files were looked for and the fix.
pub fn record_beside(run: &Path) -> Result<PathBuf, String> {
    if !run.exists() {
        return Err(format!(
            "run file '{}' does not exist; check the path",
            run.display()
        ));
    }
    let stem = run
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "run".into());
    let candidates = [
        run.with_file_name(format!("{stem}.noise.json")),
        run.with_file_name("noise.json"),
    ];
    for c in &candidates {
        if c.exists() {
            return Ok(c.clone());
        }
    }
    Err(format!(
        "no noise record for run '{}': neither '{}' nor '{}' exists; put the run's record \
         beside it under one of these names, or give it with --noise NOISE.json",
        run.display(),
        candidates[0].display(),
        candidates[1].display()
    ))
}

/// Certifies a single run and prints its summary table (or JSON).
pub fn run_single(args: &CertifyArgs, run: &Path) -> crate::Result<Outcome> {
    let output = args.output.clone().unwrap_or_else(|| default_output(run));
    let noise = match &args.noise {
        Some(n) => n.clone(),
        None => record_beside(run).map_err(crate::Error::Options)?,
    };
    let report = match (&args.report, args.reports) {
        (Some(r), _) => Some(r.clone()),
        (None, true) => Some(default_report(run)),
        (None, false) => None,
    };
    let options = options_of(args);
    let progress = Progress(std::io::stderr().is_terminal());
    let done = certify_one(
        &Job {
            run,
            noise: &noise,
            output: &output,
            report: report.as_deref(),
            options: &options,
            force: args.force,
            full_envelope: args.full_envelope,
        },
        &progress,
    )?;
    let text = if args.json {
        let mut s = serde_json::to_string_pretty(&summary_json(
            &output,
            &done.cert,
            &done.computed,
            &done.notes,
        ))
        .unwrap_or_default();
        s.push('\n');
        s
    } else {
        summary_text(&output, &done.cert, &done.computed, &done.notes)
    };
    print_stdout(&text)?;
    // Exit 3 when the data contradict the noise record; the certificate is written all the
    // same, and its claim says so.
    Ok(done.outcome())
}

/// The verdict's status word (`consistent`, `inconsistent` or `not_tested`).
fn verdict_status(cert: &Certificate) -> String {
    cert.body["verdict"]["status"]
        .as_str()
        .unwrap_or("unknown")
        .to_string()
}

/// One line per observable with a failed check: earliest failing time, implied noise scale.
fn failure_lines(c: &Computed) -> Vec<String> {
    let unit = c.loaded.run.time_unit.as_str();
    c.checks
        .observables
        .iter()
        .filter_map(|o| {
            let k = o.earliest_failure?;
            let t = c.loaded.run.times.get(k).copied().unwrap_or(f64::NAN);
            let scale = match o.implied_scale.value {
                Some(v) => format!("implied noise scale {}", show(v)),
                None => format!(
                    "implied noise scale not available ({})",
                    o.implied_scale
                        .reason
                        .as_deref()
                        .unwrap_or("no noise variance predicted")
                ),
            };
            Some(format!(
                "  {}: fails from t = {} {unit}; {scale}",
                o.name,
                show(t)
            ))
        })
        .collect()
}

/// One row of the summary: the observable's worst time and the numbers there.
struct Row {
    name: String,
    worst_time: f64,
    e_avg: f64,
    e_shot: f64,
    e_wc: f64,
    gain: f64,
    /// `s_O`: a bound at least this large is vacuous.
    spread: f64,
    /// With a data statement: the model's half-width and the certified one at the worst
    /// time (`None` where the two statements are disjoint), and at how many times the data
    /// statement is the narrower.
    data: Option<(f64, Option<f64>, usize)>,
    /// With device sections in the record: the device terms at the worst time.
    device: Option<DeviceRow>,
}

/// The device-error terms of one observable at its worst time (docs/method.md §7).
struct DeviceRow {
    incoherent: Option<f64>,
    preparation: Option<f64>,
    readout: ReadoutTerm,
    total: f64,
    /// The model statement's half-width at the worst time.
    half_width: f64,
}

fn rows(c: &Computed) -> Vec<Row> {
    c.bounds
        .observables
        .iter()
        .map(|o| {
            // The worst time: the largest half-width E_avg + E_shot, earliest on ties.
            let mut k = 0;
            for (j, p) in o.points.iter().enumerate() {
                if p.half_width > o.points[k].half_width {
                    k = j;
                }
            }
            let p = o.points.get(k);
            let e_avg = p.map_or(0.0, |p| p.e_avg);
            let e_wc = p.map_or(0.0, |p| p.e_wc);
            Row {
                name: o.name.clone(),
                spread: o.spread,
                worst_time: c.loaded.run.times.get(k).copied().unwrap_or(0.0),
                e_avg,
                e_shot: p.map_or(0.0, |p| p.e_shot),
                e_wc,
                gain: if e_avg > 0.0 { e_wc / e_avg } else { f64::NAN },
                data: o.data.as_ref().map(|d| {
                    let certified = o.certified(k).map(|c| 0.5 * (c[1] - c[0]));
                    let narrower = d.points.iter().filter(|p| p.data_narrower).count();
                    (p.map_or(0.0, |p| p.half_width), certified, narrower)
                }),
                device: o.device.as_ref().map(|d| DeviceRow {
                    incoherent: d.incoherent.as_ref().and_then(|v| v.get(k).copied()),
                    preparation: d.preparation.as_ref().and_then(|v| v.get(k).copied()),
                    readout: d.readout,
                    total: d.total.get(k).copied().unwrap_or(0.0),
                    half_width: p.map_or(0.0, |p| p.half_width),
                }),
            }
        })
        .collect()
}

/// A number for the table: four decimals or four significant digits (see
/// [`crate::numbers::short`]).
pub(super) use crate::numbers::short as show;

/// A bound for the table: `vacuous` where it reaches the observable's range `s_O` (it then
/// says nothing: every value of the spectrum is within it), else [`show`].
fn bounded(x: f64, spread: f64) -> String {
    if x >= spread {
        "vacuous".into()
    } else {
        show(x)
    }
}

pub(super) fn last_fidelity(c: &Computed) -> String {
    match c.bounds.fidelity.last() {
        Some(f) if f.vacuous => "vacuous".into(),
        Some(f) => show(f.f_low),
        None => "-".into(),
    }
}

/// The intervals for the mean the data statements used: one name, or each with the
/// observables that used it (the exact binomial one serves only declared two-outcome
/// observables).
fn methods_text(c: &Computed) -> String {
    let mut by_method: Vec<(&str, Vec<&str>)> = Vec::new();
    for o in &c.bounds.observables {
        if let Some(d) = &o.data {
            let m = d.method.as_str();
            match by_method.iter_mut().find(|(x, _)| *x == m) {
                Some((_, names)) => names.push(&o.name),
                None => by_method.push((m, vec![&o.name])),
            }
        }
    }
    if by_method.len() == 1 {
        return format!("{} interval", by_method[0].0.replace('_', "-"));
    }
    by_method
        .iter()
        .map(|(m, names)| format!("{} interval for {}", m.replace('_', "-"), names.join(", ")))
        .collect::<Vec<_>>()
        .join("; ")
}

fn summary_text(output: &Path, cert: &Certificate, c: &Computed, notes: &[String]) -> String {
    let run = &c.loaded.run;
    let unit = run.time_unit.as_str();
    let split = &c.bounds.split;
    let mut s = format!(
        "certificate {} written (digest {})\n",
        output.display(),
        &cert.digest
    );
    s.push_str(&format!(
        "run {}: {} sites, {} times, {} realizations; noise redrawn {}, {} source instances\n",
        run.run_id,
        run.n_sites(),
        run.n_times(),
        run.n_realizations(),
        c.loaded.model.redrawn.as_str().replace('_', " "),
        c.loaded.model.instances.len(),
    ));
    // Noise drawn again during an evolution (record version 3): the distinct correlation
    // times and how many instances have each.
    let mut taus: Vec<(f64, usize)> = Vec::new();
    for tau in c
        .loaded
        .model
        .instances
        .iter()
        .filter_map(|i| i.correlation_time)
    {
        match taus.iter_mut().find(|(t, _)| *t == tau) {
            Some(e) => e.1 += 1,
            None => taus.push((tau, 1)),
        }
    }
    if !taus.is_empty() {
        let parts: Vec<String> = taus
            .iter()
            .map(|(t, n)| format!("every {} {unit} for {n}", crate::numbers::short(*t)))
            .collect();
        s.push_str(&format!(
            "noise drawn again during each evolution: {} instance(s) (declared correlation \
             times, not tested by the data)\n",
            parts.join(", ")
        ));
    }
    let data = c.bounds.observables.iter().find_map(|o| o.data.as_ref());
    match data {
        None => s.push_str(&format!(
            "claim: confidence {} ({}, {} points), {}\n\n",
            split.confidence,
            split.simultaneity.as_str(),
            split.points,
            c.bounds.statement_summary()
        )),
        Some(d) => s.push_str(&format!(
            "claim: confidence {} ({}, {} points): the intersection of the model statement \
             (failure probability {}, {}) and the data statement (failure probability {} per \
             point, {})\n\n",
            show(
                cert.body["options"]["confidence"]
                    .as_f64()
                    .unwrap_or(f64::NAN)
            ),
            split.simultaneity.as_str(),
            split.points,
            show(split.epsilon),
            c.bounds.statement_summary(),
            show(d.alpha_point),
            methods_text(c),
        )),
    }
    let header = [
        "observable",
        "worst t",
        "E_avg",
        "E_shot",
        "worst case",
        "gain",
        "F_low(last t)",
    ];
    let fid = last_fidelity(c);
    let all_rows = rows(c);
    let mut table: Vec<[String; 7]> = vec![header.map(String::from)];
    for r in &all_rows {
        table.push([
            r.name.clone(),
            format!("{} {unit}", show(r.worst_time)),
            bounded(r.e_avg, r.spread),
            show(r.e_shot),
            bounded(r.e_wc, r.spread),
            if r.e_avg >= r.spread {
                // E_avg is capped at the range: a ratio to it means nothing.
                "-".into()
            } else if r.gain.is_infinite() {
                "unbounded".into()
            } else {
                format!("{}x", show(r.gain))
            },
            fid.clone(),
        ]);
    }
    s.push_str(&aligned(&table, |j| j > 0));
    s.push_str(
        "\nE_avg: error of the averaged trace from the noise; E_shot: from the finite shots; \
         worst case: no cancellation between sources; gain: worst case / E_avg (- where E_avg \
         is vacuous); vacuous: the bound reaches the observable's whole range. Full precision: the certificate and \
         --json.\n",
    );
    if data.is_some() {
        let mut table: Vec<[String; 5]> = vec![[
            "observable",
            "worst t",
            "model +-",
            "certified +-",
            "data narrower",
        ]
        .map(String::from)];
        for r in &all_rows {
            if let Some((model, certified, narrower)) = r.data {
                table.push([
                    r.name.clone(),
                    format!("{} {unit}", show(r.worst_time)),
                    show(model),
                    certified.map_or_else(|| "disjoint".into(), show),
                    format!("{narrower} of {} times", run.n_times()),
                ]);
            }
        }
        s.push('\n');
        s.push_str(&aligned(&table, |j| j > 0));
        s.push_str(
            "\nmodel +-: half-width of the model statement (E_avg + E_shot); certified +-: of \
             its intersection with the data statement (the interval from the realizations \
             themselves, docs/method.md section 6).\n",
        );
    }
    if all_rows.iter().any(|r| r.device.is_some()) {
        s.push('\n');
        s.push_str(&device_table(&all_rows, unit));
    }
    let status = verdict_status(cert);
    s.push_str(&format!(
        "consistency of the data with the noise record: {status}\n"
    ));
    if let Some(text) = cert.body["verdict"]["text"].as_str() {
        s.push_str(&format!("  {text}\n"));
    }
    for line in failure_lines(c) {
        s.push_str(&line);
        s.push('\n');
    }
    for n in notes {
        s.push_str(&format!("note: {n}\n"));
    }
    s
}

/// The device-error table: each term at the observable's worst time, and its share of the
/// half-width there.
fn device_table(all_rows: &[Row], unit: &str) -> String {
    let mut table: Vec<[String; 7]> = vec![[
        "observable",
        "worst t",
        "E_inc",
        "E_prep",
        "E_meas",
        "E_device",
        "share of +-",
    ]
    .map(String::from)];
    let absent = |x: Option<f64>| x.map_or_else(|| "-".into(), show);
    for r in all_rows {
        let Some(d) = &r.device else { continue };
        let half_width = d.half_width;
        table.push([
            r.name.clone(),
            format!("{} {unit}", show(r.worst_time)),
            absent(d.incoherent),
            absent(d.preparation),
            match d.readout {
                ReadoutTerm::Absent => "-".into(),
                ReadoutTerm::NotDeclared => "not covered".into(),
                ReadoutTerm::Bound(e) => show(e),
            },
            show(d.total),
            if half_width > 0.0 {
                format!("{:.0}%", 100.0 * (d.total / half_width).min(1.0))
            } else {
                "-".into()
            },
        ]);
    }
    let mut s = aligned(&table, |j| j > 0);
    s.push_str(
        "\nE_inc, E_prep, E_meas: incoherent, preparation and readout errors (docs/method.md \
         section 7), added with certainty to E_avg (capped at the spectrum's width); - where \
         the record has no such section; not covered: the observable is not in the record's \
         readout.applies_to.\n",
    );
    s
}

pub(super) fn summary_json(
    output: &Path,
    cert: &Certificate,
    c: &Computed,
    notes: &[String],
) -> Value {
    use crate::certificate::body::num;
    let observables: Vec<Value> = rows(c)
        .into_iter()
        .map(|r| {
            let device = r.device.as_ref().map(|d| {
                json!({
                    "e_incoherent": d.incoherent.map_or(Value::Null, num),
                    "e_preparation": d.preparation.map_or(Value::Null, num),
                    "e_readout": match d.readout {
                        ReadoutTerm::Absent => Value::Null,
                        ReadoutTerm::NotDeclared => json!("not_covered"),
                        ReadoutTerm::Bound(e) => num(e),
                    },
                    "e_device": num(d.total),
                })
            });
            let mut v = json!({
                "name": r.name,
                "worst_time": num(r.worst_time),
                "e_avg": num(r.e_avg),
                "e_shot": num(r.e_shot),
                "e_wc": num(r.e_wc),
                "gain": num(r.gain),
                "model_half_width": r.data.map_or(Value::Null, |d| num(d.0)),
                "certified_half_width": r.data.and_then(|d| d.1).map_or(Value::Null, num),
                "data_narrower_times": r.data.map_or(Value::Null, |d| json!(d.2)),
            });
            // Only with device sections, so that the output for other records is unchanged.
            if let Some(d) = device {
                v["device"] = d;
            }
            v
        })
        .collect();
    let last = c.bounds.fidelity.last();
    json!({
        "certificate": output.display().to_string(),
        "digest": cert.digest,
        "time_unit": c.loaded.run.time_unit.as_str(),
        "verdict": cert.body["verdict"]["status"],
        "failing_observables": c.checks.observables.iter().filter_map(|o| {
            let k = o.earliest_failure?;
            Some(json!({
                "name": o.name,
                "earliest_failing_time": num(c.loaded.run.times.get(k).copied().unwrap_or(f64::NAN)),
                "implied_noise_scale": o.implied_scale.value.map_or(Value::Null, num),
            }))
        }).collect::<Vec<_>>(),
        "observables": observables,
        "fidelity_last_time": {
            "f_low": last.map_or(Value::Null, |f| num(f.f_low)),
            "vacuous": last.map(|f| f.vacuous),
        },
        "notes": notes,
    })
}

/// The rows of a table as text, one line each, columns padded to their widest cell and two
/// spaces apart; a column is right-aligned where `right(j)` says so (numbers), else left.
pub(super) fn aligned<const N: usize>(
    table: &[[String; N]],
    right: impl Fn(usize) -> bool,
) -> String {
    let widths: Vec<usize> = (0..N)
        .map(|j| {
            table
                .iter()
                .map(|row| &row[j])
                .map(|cell| cell.chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut s = String::new();
    for row in table {
        let cells: Vec<String> = row
            .iter()
            .zip(&widths)
            .enumerate()
            .map(|(j, (cell, w))| {
                if right(j) {
                    format!("{cell:>w$}")
                } else {
                    format!("{cell:<w$}")
                }
            })
            .collect();
        s.push_str(cells.join("  ").trim_end());
        s.push('\n');
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_default_certificate_sits_beside_the_run() {
        assert_eq!(
            default_output(Path::new("data/run7.h5")),
            PathBuf::from("data/run7.cert.json")
        );
        assert_eq!(
            default_output(Path::new("run")),
            PathBuf::from("run.cert.json")
        );
    }

    #[test]
    fn table_numbers_are_short() {
        assert_eq!(show(0.012345), "0.01235");
        assert_eq!(show(2.0), "2");
        assert_eq!(show(1.5e-5), "1.500e-5");
        assert_eq!(show(f64::INFINITY), "unbounded");
    }
}
