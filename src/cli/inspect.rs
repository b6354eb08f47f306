//! `quassay inspect`: a readable summary of a run file and every problem with its layout.
//!
//! The summary (what could be read, even from a broken file) goes to standard output, as text
//! or with `--json` as one JSON object. A file with problems still exits with code 1: the
//! problems are returned as [`crate::Error::Input`], which `main` prints to standard error with
//! the file name and each HDF5 path; the JSON form lists them as well.

use std::fmt::Write as _;

use serde_json::json;

use super::args::InspectArgs;
use super::{print_stdout, Outcome};
use crate::error::{Error, InputKind, Problem};
use crate::inputs::run_file::{inspect_run, ObservableSummary, RunInspection, RunSummary};

/// Runs `inspect`.
pub fn run(args: &InspectArgs) -> crate::Result<Outcome> {
    let inspection = inspect_run(&args.run)?;
    let text = if args.json {
        let mut t = serde_json::to_string_pretty(&to_json(&inspection))
            .map_err(|e| Error::Options(format!("cannot render the summary as JSON: {e}")))?;
        t.push('\n');
        t
    } else {
        render_text(&inspection)
    };
    print_stdout(&text)?;
    if inspection.problems.is_empty() {
        Ok(Outcome::Success)
    } else {
        Err(Error::Input {
            kind: InputKind::Run,
            file: inspection.file,
            problems: inspection.problems,
        })
    }
}

fn problems_json(p: &[Problem]) -> serde_json::Value {
    p.iter()
        .map(|p| json!({ "path": p.path, "message": p.message }))
        .collect()
}

/// The JSON form: the file, whether it is valid, the summary, the problems and the notes.
pub fn to_json(i: &RunInspection) -> serde_json::Value {
    json!({
        "file": i.file.display().to_string(),
        "valid": i.problems.is_empty(),
        "summary": i.summary,
        "problems": problems_json(&i.problems),
        "ignored": problems_json(&i.notes),
    })
}

fn opt<T: std::fmt::Display>(v: &Option<T>) -> String {
    v.as_ref()
        .map_or_else(|| "(unreadable or missing)".to_string(), |x| x.to_string())
}

/// The text form of the summary; problems are printed by `main` after it.
pub fn render_text(i: &RunInspection) -> String {
    let s: &RunSummary = &i.summary;
    let mut out = String::new();
    let _ = writeln!(out, "run file      {}", i.file.display());
    let layout = match (&s.format, s.format_version) {
        (Some(f), Some(v)) => format!("{f} version {v}"),
        (f, v) => format!("{} version {}", opt(f), opt(&v)),
    };
    let _ = writeln!(out, "layout        {layout}");
    let _ = writeln!(out, "run id        {}", opt(&s.run_id));
    if let Some(d) = &s.description {
        let _ = writeln!(out, "description   {d}");
    }
    let _ = writeln!(out, "sites         {}", opt(&s.n_sites));
    let l = &s.lattice;
    let shape = l
        .shape
        .as_ref()
        .map(|v| v.iter().map(u64::to_string).collect::<Vec<_>>().join(" × "));
    let mut lat = opt(&l.geometry);
    if let Some(sh) = shape {
        let _ = write!(lat, ", shape {sh}");
    }
    let _ = write!(lat, ", {} boundary", opt(&l.boundary));
    if let Some(b) = l.n_bonds {
        let _ = write!(lat, ", {b} bonds");
    }
    if l.bonds_stored {
        lat.push_str(" (listed in /lattice/bonds)");
    }
    let _ = writeln!(out, "lattice       {lat}");
    let unit = s.time_unit.clone().unwrap_or_default();
    match &s.times {
        Some(t) => {
            let range = match (t.first, t.last) {
                (Some(a), Some(b)) => format!("from {a} to {b} {unit}"),
                _ => "no times".to_string(),
            };
            let _ = writeln!(
                out,
                "times         T = {}, {range} ({})",
                t.count, t.stored_as
            );
        }
        None => {
            let _ = writeln!(out, "times         (unreadable or missing)");
        }
    }
    let _ = writeln!(out, "realizations  R = {}", opt(&s.realizations));
    let h = &s.hamiltonian;
    let eu = h.energy_unit.clone().unwrap_or_default();
    let mut ham = format!("bond norms ≤ {} {eu}", opt(&h.bond_norm_max));
    if let Some([lo, hi]) = h.bond_norms_range {
        let _ = write!(ham, " (per bond, from {lo} to {hi})");
    }
    let _ = write!(ham, "; interaction range {}", opt(&h.interaction_range));
    let _ = writeln!(out, "hamiltonian   {ham}");
    let _ = writeln!(out, "observables   {}", s.observables.len());
    for o in &s.observables {
        let _ = writeln!(out, "  {}", observable_line(o));
    }
    if !i.notes.is_empty() {
        let _ = writeln!(
            out,
            "ignored       {} item(s) not in layout v1:",
            i.notes.len()
        );
        for n in &i.notes {
            let _ = writeln!(out, "  {n}");
        }
    }
    match i.problems.len() {
        0 => out.push_str("layout        no problems found\n"),
        n => {
            let _ = writeln!(out, "layout        {n} problem(s), listed below");
        }
    }
    out
}

fn observable_line(o: &ObservableSummary) -> String {
    let mut parts = vec![o.name.clone()];
    parts.push(match &o.support {
        Some(v) if v.is_empty() => "global".to_string(),
        // A long support (a magnetisation of 10^4 sites) is shortened for people; --json
        // lists every site.
        Some(v) if v.len() > 16 => format!(
            "{} sites ({}, {}, {}, ..., {})",
            v.len(),
            v[0],
            v[1],
            v[2],
            v[v.len() - 1]
        ),
        Some(v) => format!("sites {v:?}"),
        None => "support invalid (see problems)".to_string(),
    });
    parts.push(format!(
        "spectrum [{}, {}]",
        o.spectrum_min.map_or("?".into(), |x| x.to_string()),
        o.spectrum_max.map_or("?".into(), |x| x.to_string())
    ));
    if let Some([r, t]) = o.shape {
        parts.push(format!(
            "values {r} × {t} {}",
            o.stored_as.clone().unwrap_or_default()
        ));
    }
    parts.push(match &o.shots {
        Some(s) if !s.per_point => format!("{} shots each", s.min),
        Some(s) if s.min == s.max => format!("{} shots at every point", s.min),
        Some(s) => format!("{} to {} shots per point", s.min, s.max),
        None => "shots unreadable".to_string(),
    });
    let mut extra = Vec::new();
    if o.has_stderr {
        extra.push("stderr".to_string());
    }
    if o.has_ideal {
        extra.push("ideal".to_string());
    }
    if let Some(a) = o.terms {
        extra.push(format!("{a} terms"));
    }
    if !extra.is_empty() {
        parts.push(format!("with {}", extra.join(", ")));
    }
    if let Some(d) = &o.description {
        parts.push(format!("\"{d}\""));
    }
    parts.join("; ")
}
