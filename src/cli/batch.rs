//! `quassay certify` on several runs, or on folders of runs: one certificate each, certified in
//! parallel, one summary table, and an exit code that reflects the worst outcome.
//!
//! The rules (docs/batch.md):
//! - A folder contributes its `*.h5` files (not its sub-folders), sorted by name in byte order;
//!   names starting with `.` are left out. A `.h5` file that is not a valid run is a failed
//!   item; only a simulator truth file (root attribute `format` = `quassay-truth`, written by
//!   `quassay simulate` beside every run) is listed as skipped. A folder with no run is a
//!   failed item.
//! - Each run's noise record: `--noise` for all, else `RUN.noise.json` beside the run, else
//!   `noise.json` in the run's folder; none of them is a failed item.
//! - Certificates go beside each run as `RUN.cert.json`; `-o` and `--report` name one file and
//!   are usage errors here (exit 2), as is a run given twice.
//! - Exit code: 1 if some item failed (bad input or I/O), else 3 if some run is inconsistent
//!   with its record, else 0. A failing item never stops the others.
//!
//! Parallelism: a few worker threads (as many as rayon's pool has threads, at most one per run)
//! take the runs in input order; each certifies one run at a time, and the library's own
//! parallel loops run on rayon's global pool. Workers are not rayon tasks on purpose: a rayon
//! thread waiting inside one run's parallel loop may steal another task, so `par_iter` over the
//! runs could hold more runs in memory at once than there are threads. Results are kept by
//! input position, so the table and the JSON do not depend on which run finished first, and
//! every certificate body is the same as when its run is certified alone.

use std::ffi::OsString;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

use clap::CommandFactory;
use serde_json::{json, Value};

use super::args::{CertifyArgs, Cli};
use super::certify::{
    certify_one, default_output, default_report, options_of, record_beside, show, summary_json,
    Certified, Job, Progress,
};
use super::{print_stdout, Outcome};
use crate::certificate::body::CertifyOptions;
use crate::Error;

/// One line of the batch, in input order.
#[derive(Debug, Clone, PartialEq)]
enum Planned {
    /// A run file to certify.
    Run(PathBuf),
    /// A simulator truth file found in a folder: listed, not certified.
    Truth(PathBuf),
    /// A folder that gave no run file, or could not be listed (the reason).
    NoRuns(PathBuf, String),
}

/// Whether `path` is a regular file whose root attribute `format` is `quassay-truth`. Any
/// failure to tell says no: the file is then certified, and fails with the reader's message.
fn is_simulator_truth(path: &Path) -> bool {
    if !std::fs::metadata(path).is_ok_and(|m| m.is_file()) {
        return false;
    }
    hdf5::silence_errors(true);
    let Ok(file) = hdf5::File::with_options()
        .with_fapl(|p| p.file_locking(false))
        .open(path)
    else {
        return false;
    };
    if !file
        .attr_names()
        .is_ok_and(|n| n.iter().any(|x| x == "format"))
    {
        return false;
    }
    file.attr("format")
        .and_then(|a| a.read_scalar::<hdf5::types::VarLenUnicode>())
        .is_ok_and(|s| s.as_str() == "quassay-truth")
}

/// The `*.h5` entries of a folder (not sub-folders, not names starting with `.`), sorted by
/// name in byte order.
fn runs_in(dir: &Path) -> std::io::Result<Vec<PathBuf>> {
    let mut names: Vec<OsString> = Vec::new();
    for entry in std::fs::read_dir(dir)? {
        let entry = entry?;
        let name = entry.file_name();
        let text = name.to_string_lossy();
        let is_h5 = Path::new(&name)
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("h5"));
        if !is_h5 || text.starts_with('.') {
            continue;
        }
        // Followed through symbolic links; anything but a folder is offered to the reader,
        // which refuses FIFOs and devices with its own message.
        if std::fs::metadata(entry.path()).is_ok_and(|m| m.is_dir()) {
            continue;
        }
        names.push(name);
    }
    names.sort();
    Ok(names.into_iter().map(|n| dir.join(n)).collect())
}

/// Expands the command line's paths into the batch's lines, in order.
fn plan(inputs: &[PathBuf]) -> Vec<Planned> {
    let mut out = Vec::new();
    for p in inputs {
        if !p.is_dir() {
            out.push(Planned::Run(p.clone()));
            continue;
        }
        match runs_in(p) {
            Err(e) => out.push(Planned::NoRuns(
                p.clone(),
                format!(
                    "cannot list folder '{}': {e}; check that it exists and may be read",
                    p.display()
                ),
            )),
            Ok(files) => {
                let mut any = false;
                for f in files {
                    if is_simulator_truth(&f) {
                        out.push(Planned::Truth(f));
                    } else {
                        any = true;
                        out.push(Planned::Run(f));
                    }
                }
                if !any {
                    out.push(Planned::NoRuns(
                        p.clone(),
                        format!(
                            "folder '{}' holds no run file (*.h5, sub-folders are not searched); \
                             give a folder of runs, or the run files themselves",
                            p.display()
                        ),
                    ));
                }
            }
        }
    }
    out
}

/// A path as one key per file: canonical if it exists, else as given.
fn file_key(p: &Path) -> PathBuf {
    p.canonicalize().unwrap_or_else(|_| p.to_path_buf())
}

/// The certificate's path as a key (its folder canonical; the file itself need not exist).
fn output_key(p: &Path) -> PathBuf {
    match (p.parent(), p.file_name()) {
        (Some(dir), Some(name)) if !dir.as_os_str().is_empty() => file_key(dir).join(name),
        (_, Some(name)) => file_key(Path::new(".")).join(name),
        _ => p.to_path_buf(),
    }
}

/// A usage problem of a batch, found before any work: the message, or `None`.
fn usage_problem(args: &CertifyArgs, planned: &[Planned]) -> Option<String> {
    if args.output.is_some() {
        return Some(
            "-o/--output names one certificate, so it takes a single run file; with several \
             runs or a folder, each certificate is written beside its run as RUN.cert.json: \
             drop -o"
                .into(),
        );
    }
    if args.report.is_some() {
        return Some(
            "--report names one report, so it takes a single run file; with several runs or a \
             folder, use --reports to write RUN.report.html beside each run"
                .into(),
        );
    }
    let runs: Vec<&PathBuf> = planned
        .iter()
        .filter_map(|p| match p {
            Planned::Run(r) => Some(r),
            _ => None,
        })
        .collect();
    for (j, b) in runs.iter().enumerate() {
        for a in &runs[..j] {
            if file_key(a) == file_key(b) {
                return Some(format!(
                    "the run '{}' is given twice (also as '{}'); give each run once",
                    b.display(),
                    a.display()
                ));
            }
            if output_key(&default_output(a)) == output_key(&default_output(b)) {
                return Some(format!(
                    "the runs '{}' and '{}' would both write the certificate '{}'; rename one \
                     of them or certify them one at a time with -o",
                    a.display(),
                    b.display(),
                    default_output(b).display()
                ));
            }
        }
    }
    None
}

/// What became of one line.
enum Line {
    /// Certified: exit 0 (`Success`) or 3 (`Negative`), with the summary.
    Done(Outcome, Box<Summary>),
    Skipped(String),
    /// A short reason for the table and the full message.
    Failed {
        short: String,
        message: String,
        problems: Vec<Value>,
    },
}

/// What the summary keeps of a certified run (the certificate itself is dropped).
struct Summary {
    noise: PathBuf,
    certificate: PathBuf,
    /// The largest E_avg over observables and times.
    max_e_avg: f64,
    /// The fidelity bound at the last time, as the single-run table shows it.
    f_low_last: String,
    notes: Vec<String>,
    json: Value,
}

fn summarise(noise: &Path, output: &Path, done: &Certified) -> Summary {
    let max_e_avg = done
        .computed
        .bounds
        .observables
        .iter()
        .flat_map(|o| o.points.iter().map(|p| p.e_avg))
        .fold(f64::NAN, f64::max);
    Summary {
        noise: noise.to_path_buf(),
        certificate: output.to_path_buf(),
        max_e_avg,
        f_low_last: super::certify::last_fidelity(&done.computed),
        notes: done.notes.clone(),
        json: summary_json(output, &done.cert, &done.computed, &done.notes),
    }
}

/// The table's short reason for an error.
fn short_reason(e: &Error) -> String {
    let name = |p: &Path| {
        p.file_name()
            .map_or_else(|| p.display().to_string(), |n| n.to_string_lossy().into())
    };
    match e {
        Error::Input { kind, problems, .. } => match problems.len() {
            1 => format!("bad {} (1 problem)", kind.describe()),
            n => format!("bad {} ({n} problems)", kind.describe()),
        },
        Error::Read { path, .. } => format!("cannot read {}", name(path)),
        Error::Write { path, .. } => format!("cannot write {}", name(path)),
        Error::OutputExists { path } => format!("{} exists (--force replaces it)", name(path)),
        Error::Options(_) => "bad options".into(),
    }
}

fn failed(e: &Error) -> Line {
    Line::Failed {
        short: short_reason(e),
        message: e.to_string(),
        problems: e
            .problems()
            .iter()
            .map(|p| json!({ "path": p.path, "message": p.message }))
            .collect(),
    }
}

/// Certifies one run of the batch; never panics out (a panic is a failed item).
fn certify_item(run: &Path, args: &CertifyArgs, options: &CertifyOptions) -> Line {
    let noise = match &args.noise {
        Some(n) => n.clone(),
        None => match record_beside(run) {
            Ok(n) => n,
            Err(message) => {
                return Line::Failed {
                    short: if run.exists() {
                        "no noise record".into()
                    } else {
                        "no such run file".into()
                    },
                    message,
                    problems: Vec::new(),
                }
            }
        },
    };
    let output = default_output(run);
    let report = args.reports.then(|| default_report(run));
    let job = Job {
        run,
        noise: &noise,
        output: &output,
        report: report.as_deref(),
        options,
        force: args.force,
        full_envelope: args.full_envelope,
    };
    let attempt = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        certify_one(&job, &Progress(false))
    }));
    match attempt {
        Ok(Ok(done)) => Line::Done(done.outcome(), Box::new(summarise(&noise, &output, &done))),
        Ok(Err(e)) => failed(&e),
        Err(_) => Line::Failed {
            short: "internal error".into(),
            message: format!(
                "quassay stopped on an internal error while certifying '{}' (a bug: please \
                 report it with the message above); the other runs went on",
                run.display()
            ),
            problems: Vec::new(),
        },
    }
}

/// Certifies the runs of `planned` on a few worker threads; results in input order.
fn certify_all(planned: &[Planned], args: &CertifyArgs) -> Vec<Line> {
    let options = options_of(args);
    let todo: Vec<usize> = (0..planned.len())
        .filter(|&i| matches!(planned[i], Planned::Run(_)))
        .collect();
    let slots: Vec<Mutex<Option<Line>>> = planned.iter().map(|_| Mutex::new(None)).collect();
    let next = AtomicUsize::new(0);
    // Progress on a terminal only (crate::progress); the runs' own bars stay hidden.
    let task = crate::progress::Task::start_outer("certify: runs", todo.len() as u64);
    let workers = rayon::current_num_threads().clamp(1, todo.len().max(1));
    std::thread::scope(|scope| {
        for _ in 0..workers {
            scope.spawn(|| {
                while let Some(&i) = todo.get(next.fetch_add(1, Ordering::Relaxed)) {
                    let Planned::Run(run) = &planned[i] else {
                        continue;
                    };
                    let r = certify_item(run, args, &options);
                    if let Ok(mut slot) = slots[i].lock() {
                        *slot = Some(r);
                    }
                    task.inc(1);
                }
            });
        }
    });
    drop(task);
    planned
        .iter()
        .zip(slots)
        .map(|(p, slot)| match p {
            Planned::Truth(_) => Line::Skipped("simulator truth, not a run".into()),
            Planned::NoRuns(_, why) => Line::Failed {
                short: "no run file".into(),
                message: why.clone(),
                problems: Vec::new(),
            },
            Planned::Run(run) => slot
                .into_inner()
                .ok()
                .flatten()
                .unwrap_or_else(|| Line::Failed {
                    short: "internal error".into(),
                    message: format!("'{}' was not certified (internal error)", run.display()),
                    problems: Vec::new(),
                }),
        })
        .collect()
}

/// The path a line is about.
fn subject(p: &Planned) -> &Path {
    match p {
        Planned::Run(r) | Planned::Truth(r) | Planned::NoRuns(r, _) => r,
    }
}

/// The batch's outcome: failed (1) before inconsistent (3) before success (0).
fn worst(results: &[Line]) -> Outcome {
    if results.iter().any(|r| matches!(r, Line::Failed { .. })) {
        Outcome::Failed
    } else if results
        .iter()
        .any(|r| matches!(r, Line::Done(Outcome::Negative, _)))
    {
        Outcome::Negative
    } else {
        Outcome::Success
    }
}

/// Counts of certified, inconsistent, failed and skipped lines.
fn counts(results: &[Line]) -> [usize; 4] {
    let mut c = [0; 4];
    for r in results {
        let k = match r {
            Line::Done(Outcome::Negative, _) => 1,
            Line::Done(..) => 0,
            Line::Failed { .. } => 2,
            Line::Skipped(_) => 3,
        };
        c[k] += 1;
    }
    c
}

/// Numbers of the lines (1-based) that satisfy `pick`, as `1, 3, 4`.
fn numbers_of(results: &[Line], pick: impl Fn(&Line) -> bool) -> String {
    results
        .iter()
        .enumerate()
        .filter(|(_, r)| pick(r))
        .map(|(i, _)| (i + 1).to_string())
        .collect::<Vec<_>>()
        .join(", ")
}

fn plural(n: usize, one: &'static str, many: &'static str) -> &'static str {
    if n == 1 {
        one
    } else {
        many
    }
}

/// `line` or `lines` for a list such as `1, 3`.
fn lines_word(list: &str) -> &'static str {
    if list.contains(',') {
        "lines"
    } else {
        "line"
    }
}

fn table_text(planned: &[Planned], results: &[Line]) -> String {
    let [ok, bad, fail, skip] = counts(results);
    let mut s = format!(
        "certify: {} {}; {ok} certified, {bad} inconsistent with the noise record, {fail} \
         failed, {skip} skipped\n\n",
        results.len(),
        plural(results.len(), "entry", "entries")
    );
    let header = [
        "#",
        "run",
        "outcome",
        "max E_avg",
        "F_low(last t)",
        "certificate",
    ];
    let mut table: Vec<[String; 6]> = vec![header.map(String::from)];
    for (i, (p, r)) in planned.iter().zip(results).enumerate() {
        let (outcome, e, f, cert) = match r {
            Line::Done(o, sum) => (
                if *o == Outcome::Negative {
                    "inconsistent with record".to_string()
                } else {
                    "certified".to_string()
                },
                show(sum.max_e_avg),
                sum.f_low_last.clone(),
                sum.certificate.display().to_string(),
            ),
            Line::Skipped(why) => (
                format!("skipped: {why}"),
                "-".into(),
                "-".into(),
                "-".into(),
            ),
            Line::Failed { short, .. } => (
                format!("failed: {short}"),
                "-".into(),
                "-".into(),
                "-".into(),
            ),
        };
        table.push([
            (i + 1).to_string(),
            subject(p).display().to_string(),
            outcome,
            e,
            f,
            cert,
        ]);
    }
    s.push_str(&super::certify::aligned(&table, |j| matches!(j, 0 | 3 | 4)));
    s.push_str(
        "\nmax E_avg: largest E_avg over the run's observables and times; F_low(last t): \
         fidelity lower bound at the last time.\n",
    );
    let noted = numbers_of(
        results,
        |r| matches!(r, Line::Done(_, s) if !s.notes.is_empty()),
    );
    if !noted.is_empty() {
        s.push_str(&format!(
            "note ({} {noted}): an input is not inside the certificate's folder, so it is \
             recorded by its file name: verify with --inputs DIR, DIR holding the inputs\n",
            lines_word(&noted)
        ));
    }
    let failed = numbers_of(results, |r| matches!(r, Line::Failed { .. }));
    let negative = numbers_of(results, |r| matches!(r, Line::Done(Outcome::Negative, _)));
    match worst(results) {
        Outcome::Failed => s.push_str(&format!(
            "exit code 1: {} {failed} could not be certified (the reasons are on standard \
             error); the others were certified as shown\n",
            lines_word(&failed)
        )),
        Outcome::Negative => s.push_str(&format!(
            "exit code 3: the data of {} {negative} are inconsistent with the noise record \
             (the certificates are written and say so)\n",
            lines_word(&negative)
        )),
        _ => {}
    }
    s
}

fn table_json(planned: &[Planned], results: &[Line]) -> Value {
    let [ok, bad, fail, skip] = counts(results);
    let runs: Vec<Value> = planned
        .iter()
        .zip(results)
        .map(|(p, r)| {
            let path = subject(p).display().to_string();
            match r {
                Line::Done(o, sum) => json!({
                    "run": path,
                    "outcome": if *o == Outcome::Negative { "inconsistent" } else { "certified" },
                    "exit_code": o.code(),
                    "noise_record": sum.noise.display().to_string(),
                    "certificate": sum.certificate.display().to_string(),
                    "max_e_avg": crate::certificate::body::num(sum.max_e_avg),
                    "summary": sum.json,
                }),
                Line::Skipped(why) => json!({
                    "run": path,
                    "outcome": "skipped",
                    "exit_code": 0,
                    "reason": why,
                }),
                Line::Failed {
                    short,
                    message,
                    problems,
                } => json!({
                    "run": path,
                    "outcome": "failed",
                    "exit_code": Outcome::Failed.code(),
                    "reason": short,
                    "message": message,
                    "problems": problems,
                }),
            }
        })
        .collect();
    json!({
        "runs": runs,
        "counts": { "certified": ok, "inconsistent": bad, "failed": fail, "skipped": skip },
        "exit_code": worst(results).code(),
    })
}

/// Prints a usage error as clap does (on standard error) and returns its outcome (exit 2).
fn usage(message: &str) -> Outcome {
    let mut cli = Cli::command();
    // Sets the sub-command's name for the usage line (`quassay certify`).
    cli.build();
    let e = match cli.find_subcommand_mut("certify") {
        Some(sub) => sub.error(clap::error::ErrorKind::ArgumentConflict, message),
        None => cli.error(clap::error::ErrorKind::ArgumentConflict, message),
    };
    let _ = e.print();
    Outcome::Usage
}

/// Runs `certify` on several runs or folders.
pub fn run(args: &CertifyArgs) -> crate::Result<Outcome> {
    let planned = plan(&args.runs);
    if let Some(message) = usage_problem(args, &planned) {
        return Ok(usage(&message));
    }
    let results = certify_all(&planned, args);
    let text = if args.json {
        let mut s =
            serde_json::to_string_pretty(&table_json(&planned, &results)).unwrap_or_default();
        s.push('\n');
        s
    } else {
        table_text(&planned, &results)
    };
    print_stdout(&text)?;
    let mut err = std::io::stderr().lock();
    for (i, (p, r)) in planned.iter().zip(&results).enumerate() {
        if let Line::Failed { message, .. } = r {
            let _ = std::io::Write::write_all(
                &mut err,
                format!(
                    "error: line {} ({}): {message}\n",
                    i + 1,
                    subject(p).display()
                )
                .as_bytes(),
            );
        }
    }
    Ok(worst(&results))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn touch(p: &Path) {
        std::fs::write(p, b"").unwrap();
    }

    #[test]
    fn a_folder_gives_its_h5_files_sorted_by_name_not_its_sub_folders_or_hidden_files() {
        let d = tempfile::tempdir().unwrap();
        for n in [
            "b.h5",
            "a10.h5",
            "a2.H5",
            ".hidden.h5",
            "notes.txt",
            "c.h5.bak",
        ] {
            touch(&d.path().join(n));
        }
        std::fs::create_dir(d.path().join("sub.h5")).unwrap();
        let got: Vec<String> = runs_in(d.path())
            .unwrap()
            .iter()
            .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
            .collect();
        // Byte order: '1' (0x31) < '2' (0x32) < 'b'.
        assert_eq!(got, ["a10.h5", "a2.H5", "b.h5"]);
    }

    #[test]
    fn a_folder_without_runs_is_one_failed_line() {
        let d = tempfile::tempdir().unwrap();
        touch(&d.path().join("noise.json"));
        let p = plan(&[d.path().to_path_buf()]);
        assert!(matches!(&p[..], [Planned::NoRuns(..)]), "{p:?}");
    }

    #[test]
    fn the_record_beside_a_run_is_found_by_its_stem_first() {
        let d = tempfile::tempdir().unwrap();
        let run = d.path().join("r1.h5");
        assert!(record_beside(&run).unwrap_err().contains("does not exist"));
        touch(&run);
        assert!(record_beside(&run).unwrap_err().contains("--noise"));
        touch(&d.path().join("noise.json"));
        assert_eq!(record_beside(&run).unwrap(), d.path().join("noise.json"));
        touch(&d.path().join("r1.noise.json"));
        assert_eq!(record_beside(&run).unwrap(), d.path().join("r1.noise.json"));
    }

    #[test]
    fn the_worst_outcome_wins_failed_before_inconsistent() {
        let fail = || Line::Failed {
            short: String::new(),
            message: String::new(),
            problems: Vec::new(),
        };
        let skip = || Line::Skipped(String::new());
        assert_eq!(worst(&[skip()]), Outcome::Success);
        assert_eq!(worst(&[skip(), fail()]), Outcome::Failed);
        assert_eq!(Outcome::Failed.code(), 1);
        assert_eq!(Outcome::Negative.code(), 3);
    }
}
