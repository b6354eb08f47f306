//! The `/observables/<name>` groups of layout v1: values, shots, errors, supports, spectra and
//! the optional term structure, checked against the run (`n_sites`, T) and against each other
//! (every observable has the same realizations R).
//!
//! The R × T datasets are read in row blocks (about 1 MiB each): every block is checked,
//! summed per time (what the bounds need) and passed to a [`ContentSink`], then dropped unless
//! the caller keeps the whole observable. So memory does not grow with R × T × K. A sink that
//! takes kept datasets whole ([`ContentSink::takes_kept_floats`], as `certify`'s does) gets
//! them read straight into the kept storage instead, block by block, with no copy.
//!
//! The files: this one holds the group's keys, the listing and one observable read whole;
//! `scan` the block-by-block scan of an R × T float dataset (checks, sums, kept storage);
//! `shots` the shot counts (attribute or dataset); `terms` the optional term structure.

mod scan;
mod shots;
mod terms;

use hdf5::Group;
use ndarray::Ix1;
use scan::{check_2d, scan_floats, Scanned};
use shots::read_shots;
use terms::read_terms;

use super::access::{
    attr_problem, f64_attr, f64_dataset, float_storage, int_attr, int_dataset, int_vec_attr,
    note_unknown, open_attr, open_dataset, open_group, string_attr, Collector,
};
use super::checks;
use super::stream::{ContentSink, ObservableOutline, ObservableRead};
use super::{ObservableSummary, RunSummary};
use crate::model::sums::{ObservableSums, ShotSums};
use crate::model::{Observable, Shots};

pub use scan::recycle_storage;

const OBS_ATTRS: &[&str] = &[
    "shots",
    "support",
    "spectrum_min",
    "spectrum_max",
    "description",
    "two_outcomes",
];
const OBS_MEMBERS: &[&str] = &[
    "values",
    "shots",
    "stderr",
    "ideal",
    "support",
    "terms_support",
    "terms_weight",
    "terms_spectrum",
];

/// What the observables are checked against.
pub struct Context {
    pub n_sites: Option<usize>,
    pub n_times: Option<usize>,
}

/// Opens `/observables` and lists its members, sorted by name.
pub fn list_observables(c: &mut Collector, file: &hdf5::File) -> Option<(Group, Vec<String>)> {
    let g = open_group(
        c,
        file,
        "/",
        "observables",
        "add a group /observables holding one group per observable",
    )?;
    let _ = note_attrs_only(c, &g);
    let mut names = match g.member_names() {
        Ok(n) => n,
        Err(e) => {
            c.problem(
                "/observables",
                format!("its members cannot be listed ({e}); rewrite the group"),
            );
            return None;
        }
    };
    names.sort();
    if names.is_empty() {
        c.problem(
            "/observables",
            "holds no observable; add at least one group /observables/<name> with values, shots and spectrum_min/spectrum_max",
        );
        return None;
    }
    Some((g, names))
}

/// Reads the observables `names` of `g` one at a time, handing each sound one to `visit`;
/// returns their outlines (and R) when all are sound. `keep` keeps every observable whole.
#[allow(clippy::too_many_arguments)]
pub fn read_observables(
    c: &mut Collector,
    g: &Group,
    names: &[String],
    ctx: &Context,
    s: &mut RunSummary,
    keep: bool,
    sink: &mut dyn ContentSink,
    visit: &mut dyn FnMut(ObservableRead),
) -> Option<(Vec<ObservableOutline>, usize)> {
    let mut out = Some(Vec::with_capacity(names.len()));
    let mut reference: Option<(String, usize)> = None;
    for name in names {
        let at = format!("/observables/{name}");
        let mut ok = true;
        if !checks::valid_name(name) {
            c.problem(&at, format!("the name \"{name}\" uses characters other than ASCII letters, digits, `_`, `-` and `.`; rename the group"));
            ok = false;
        }
        let Ok(group) = g.group(name) else {
            c.problem(&at, "is not a group; every member of /observables must be a group with values, shots and spectrum_min/spectrum_max");
            out = None;
            continue;
        };
        let (obs, summary) = read_one(c, &group, &at, name, ctx, keep, sink);
        if let Some([r, _]) = summary.shape {
            match &reference {
                None => {
                    reference = Some((name.clone(), r));
                    s.realizations = Some(r);
                }
                Some((first, r0)) if *r0 != r => {
                    c.problem(format!("{at}/values"), format!("has {r} realizations (rows) but /observables/{first}/values has {r0}; every observable must hold the same realizations"));
                    ok = false;
                }
                Some(_) => {}
            }
        }
        s.observables.push(summary);
        match (obs, ok, out.as_mut()) {
            (Some(o), true, Some(v)) => {
                v.push(o.outline.clone());
                visit(o);
            }
            _ => out = None,
        }
    }
    Some((out?, reference.map_or(0, |(_, r)| r)))
}

/// `/observables` itself has no attributes in layout v1; note any.
fn note_attrs_only(c: &mut Collector, g: &Group) -> Option<()> {
    let mut names = g.attr_names().ok()?;
    names.sort();
    for a in names {
        c.note(
            "/observables",
            format!("attribute `{a}` is not part of layout v1 and was ignored"),
        );
    }
    Some(())
}

thread_local! {
    /// The storage of the last observable's values handed back by [`recycle_storage`]: the
    /// next observable of the same shape reuses it instead of asking the kernel for fresh
    /// zeroed pages (for R × T = 10^7 values, 80 MB faulted in page by page per observable).
    static SPARE: std::cell::Cell<Vec<f64>> = const { std::cell::Cell::new(Vec::new()) };
}

/// The values and sums of one observable's R × T data.
struct Data {
    values: Scanned,
    shots: (Shots, Option<Vec<f64>>),
    stderr: Option<Scanned>,
}

fn read_one(
    c: &mut Collector,
    g: &Group,
    at: &str,
    name: &str,
    ctx: &Context,
    keep: bool,
    sink: &mut dyn ContentSink,
) -> (Option<ObservableRead>, ObservableSummary) {
    note_unknown(c, g, at, OBS_ATTRS, OBS_MEMBERS);
    let mut s = ObservableSummary {
        name: name.to_string(),
        ..ObservableSummary::default()
    };
    let before = c.problems.len();

    // Spectrum.
    let fix = "add the smallest and largest eigenvalue of the observable as floats";
    let lo = f64_attr(c, g, at, "spectrum_min", Some(fix));
    let hi = f64_attr(c, g, at, "spectrum_max", Some(fix));
    s.spectrum_min = lo;
    s.spectrum_max = hi;
    let spectrum = match (lo, hi) {
        (Some(lo), Some(hi)) if !lo.is_finite() || !hi.is_finite() => {
            c.problem(at, format!("spectrum [{lo}, {hi}] is not finite; give finite spectrum_min and spectrum_max"));
            None
        }
        (Some(lo), Some(hi)) if lo > hi => {
            c.problem(
                at,
                format!("spectrum_min = {lo} is larger than spectrum_max = {hi}; swap them"),
            );
            None
        }
        (Some(lo), Some(hi)) => Some((lo, hi)),
        _ => None,
    };

    // Values.
    let values_path = format!("{at}/values");
    let mut dims = None;
    let mut values_rounding = 0.0;
    let values = match open_dataset(c, g, at, "values") {
        None => {
            if !g.link_exists("values") {
                c.problem(&values_path, "is missing; add the estimates of the observable as a realizations × times float dataset");
            }
            None
        }
        Some(ds) => float_storage(c, &ds, &values_path).and_then(|stored| {
            s.stored_as = Some(stored.describe().to_string());
            values_rounding = stored.relative_rounding();
            let (r, t) = check_2d(c, &ds.shape(), &values_path, ctx.n_times, None)?;
            s.shape = Some([r, t]);
            if r == 0 {
                c.problem(
                    &values_path,
                    "has no realizations (0 rows); store at least one",
                );
                return None;
            }
            let mut finite = checks::FiniteScan::default();
            let mut range = spectrum.map(|(lo, hi)| {
                checks::RangeScan::new(
                    lo,
                    hi,
                    checks::range_tolerance(lo, hi, stored.relative_rounding()),
                )
            });
            let scanned = scan_floats(
                c,
                &ds,
                &values_path,
                (r, t),
                keep,
                sink,
                |x| x,
                &mut |r0, b, extent| {
                    finite.push_known(r0, b, extent);
                    if let Some(range) = range.as_mut() {
                        range.push_known(r0, b, extent);
                    }
                },
            )?;
            if let Some(m) = finite.message() {
                c.problem(&values_path, m);
            }
            if let Some(m) = range.and_then(|r| r.message("value")) {
                c.problem(&values_path, m);
            }
            dims = Some((r, t));
            Some(scanned)
        }),
    };

    let shots = read_shots(c, g, at, dims, ctx.n_times, keep, sink, &mut s);

    // Standard errors.
    let stderr_path = format!("{at}/stderr");
    let stderr = open_dataset(c, g, at, "stderr").and_then(|ds| {
        s.has_stderr = true;
        float_storage(c, &ds, &stderr_path)?;
        let shape = check_2d(c, &ds.shape(), &stderr_path, ctx.n_times, dims.map(|d| d.0))?;
        let mut finite = checks::FiniteScan::default();
        let mut negative: Option<([usize; 2], f64)> = None;
        let scanned = scan_floats(
            c,
            &ds,
            &stderr_path,
            shape,
            keep,
            sink,
            |x| x * x,
            &mut |r0, b, extent| {
                finite.push_known(r0, b, extent);
                // No value below the smallest (NaN compares false both here and there).
                if negative.is_none() && extent.min < 0.0 {
                    negative = b
                        .indexed_iter()
                        .find(|(_, x)| **x < 0.0)
                        .map(|((r, k), &x)| ([r0 + r, k], x));
                }
            },
        )?;
        if let Some(m) = finite.message() {
            c.problem(&stderr_path, m);
        } else if let Some(([r, k], x)) = negative {
            c.problem(&stderr_path, format!("standard error {x} at [realization, time] = [{r}, {k}] is negative; standard errors are ≥ 0"));
        }
        Some(scanned)
    });

    // Ideal prediction.
    let ideal_path = format!("{at}/ideal");
    let ideal = open_dataset(c, g, at, "ideal").and_then(|ds| {
        s.has_ideal = true;
        let (a, stored) = f64_dataset(c, &ds, &ideal_path)?;
        let Ok(v) = a.into_dimensionality::<Ix1>() else {
            c.problem(
                &ideal_path,
                format!(
                    "has shape {:?}; store one ideal value per time as a vector",
                    ds.shape()
                ),
            );
            return None;
        };
        if let Some(t) = ctx.n_times {
            if v.len() != t {
                c.problem(
                    &ideal_path,
                    format!(
                        "has {} values but /times has {t}; store one ideal value per time",
                        v.len()
                    ),
                );
                return None;
            }
        }
        if let Some(k) = v.iter().position(|x| !x.is_finite()) {
            c.problem(
                &ideal_path,
                format!("ideal value at index {k} is NaN or infinite; store finite values"),
            );
        } else if let Some((lo, hi)) = spectrum {
            let tol = checks::range_tolerance(lo, hi, stored.relative_rounding());
            if let Some(m) =
                checks::check_in_range(checks::indexed_1d(v.view()), lo, hi, tol, "ideal value")
            {
                c.problem(&ideal_path, m);
            }
        }
        Some(v.to_vec())
    });

    // Support: an attribute, or (a minor extension of layout v1, for supports too large for
    // HDF5's compact attributes) a one-dimensional dataset; not both.
    let support = match read_support(c, g, at) {
        Err(()) => None,
        Ok(None) => Some(Vec::new()),
        Ok(Some((raw, dataset))) => match checks::check_support(&raw, ctx.n_sites) {
            Ok(v) => Some(v),
            Err(m) if dataset => {
                c.problem(format!("{at}/support"), m);
                None
            }
            Err(m) => {
                attr_problem(c, at, "support", m);
                None
            }
        },
    };
    s.support = support.clone();

    let description = string_attr(c, g, at, "description", None);
    s.description = description.clone();

    let terms = read_terms(c, g, at, ctx, spectrum, support.as_deref(), &mut s);

    // The declaration that every shot gives one of the spectrum's two ends (a minor
    // extension of layout v1, docs/run-format.md): 0 or 1, absent means 0.
    let two_outcomes = match int_attr(c, g, at, "two_outcomes", None) {
        None | Some(0) => false,
        Some(1) => true,
        Some(v) => {
            attr_problem(
                c,
                at,
                "two_outcomes",
                format!("is {v}; store 1 (every shot's outcome is spectrum_min or spectrum_max) or 0, or leave it out"),
            );
            false
        }
    };
    s.two_outcomes = two_outcomes;
    // The counts behind the values are checked wherever the values are read whole (inspect
    // and certify always read them so).
    if let (true, Some(v), Some((sh, _)), Some((lo, hi))) = (
        two_outcomes,
        values.as_ref().and_then(|v| v.kept.as_ref()),
        shots.as_ref(),
        spectrum,
    ) {
        let tol = checks::range_tolerance(lo, hi, values_rounding);
        if let Some(m) = checks::check_outcome_counts(v.view(), |r, k| sh.at(r, k), lo, hi, tol) {
            c.problem(&values_path, m);
        }
    }

    if c.problems.len() > before {
        return (None, s);
    }
    let (Some(values), Some(shots), Some(support), Some((lo, hi)), Some(terms)) =
        (values, shots, support, spectrum, terms)
    else {
        return (None, s);
    };
    let data = Data {
        values,
        shots,
        stderr,
    };
    let outline = ObservableOutline {
        name: name.to_string(),
        support,
        spectrum_min: lo,
        spectrum_max: hi,
        description,
        terms,
        ideal,
        per_point_shots: matches!(data.shots.0, Shots::PerPoint(_)),
        has_stderr: data.stderr.is_some(),
        two_outcomes,
    };
    let realizations = dims.map_or(0, |d| d.0);
    let shot_sums = match (&data.stderr, &data.shots) {
        (Some(e), _) => ShotSums::SquaredErrors(e.sums.clone()),
        (None, (Shots::Uniform(n), _)) => ShotSums::Uniform(*n),
        (None, (_, inv)) => ShotSums::InverseCounts(inv.clone().unwrap_or_default()),
    };
    let sums = ObservableSums {
        realizations,
        value_sums: data.values.sums,
        shots: shot_sums,
    };
    let kept = match (data.values.kept, data.shots.0) {
        (Some(values), shots) => Some(Observable {
            name: outline.name.clone(),
            values,
            shots,
            stderr: data.stderr.and_then(|e| e.kept),
            ideal: outline.ideal.clone(),
            support: outline.support.clone(),
            spectrum_min: lo,
            spectrum_max: hi,
            description: outline.description.clone(),
            terms: outline.terms.clone(),
            two_outcomes,
        }),
        _ => None,
    };
    (
        Some(ObservableRead {
            outline,
            sums,
            kept,
        }),
        s,
    )
}

/// The raw sites of `support` and whether they are a dataset: `Ok(None)` when absent, `Err(())`
/// when a problem was reported.
/// The dataset form is read whole (a support has at most `n_sites` entries) and, like the
/// attribute, is recorded in the certificate's body rather than by a content digest.
fn read_support(c: &mut Collector, g: &Group, at: &str) -> Result<Option<(Vec<i128>, bool)>, ()> {
    let path = format!("{at}/support");
    match (open_attr(g, "support").is_some(), g.link_exists("support")) {
        (true, true) => {
            c.problem(
                &path,
                "is given both as an attribute and as a dataset; keep one of them",
            );
            Err(())
        }
        (true, false) => int_vec_attr(c, g, at, "support")
            .map(|v| Some((v, false)))
            .ok_or(()),
        (false, false) => Ok(None),
        (false, true) => {
            let ds = open_dataset(c, g, at, "support").ok_or(())?;
            let a = int_dataset(c, &ds, &path).ok_or(())?;
            if a.ndim() != 1 {
                c.problem(
                    &path,
                    format!(
                        "has shape {:?}; store the sites as a one-dimensional integer dataset",
                        a.shape()
                    ),
                );
                return Err(());
            }
            Ok(Some((a.iter().copied().collect(), true)))
        }
    }
}
