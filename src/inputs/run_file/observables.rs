//! The `/observables/<name>` groups of layout v1: values, shots, errors, supports, spectra and
//! the optional term structure, checked against the run (`n_sites`, T) and against each other
//! (every observable has the same realizations R).

use hdf5::Group;
use ndarray::{Array2, ArrayD, Ix1, Ix2};

use super::access::{
    attr_problem, f64_attr, f64_dataset, int_dataset, int_values_attr, int_vec_attr, open_attr,
    open_dataset, string_attr, Collector,
};
use super::checks;
use super::layout::{note_unknown, open_group};
use super::{ObservableSummary, RunSummary, ShotsSummary};
use crate::model::{Observable, Shots, Terms};

const OBS_ATTRS: &[&str] = &[
    "shots",
    "support",
    "spectrum_min",
    "spectrum_max",
    "description",
];
const OBS_MEMBERS: &[&str] = &[
    "values",
    "shots",
    "stderr",
    "ideal",
    "terms_support",
    "terms_weight",
    "terms_spectrum",
];

/// What the observables are checked against.
pub struct Context {
    pub n_sites: Option<usize>,
    pub n_times: Option<usize>,
}

/// Reads every observable, sorted by name; `Some` only when all are sound.
pub fn read_observables(
    c: &mut Collector,
    file: &hdf5::File,
    ctx: &Context,
    s: &mut RunSummary,
) -> Option<Vec<Observable>> {
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
    let mut out = Some(Vec::with_capacity(names.len()));
    let mut reference: Option<(String, usize)> = None;
    for name in names {
        let at = format!("/observables/{name}");
        let mut ok = true;
        if !checks::valid_name(&name) {
            c.problem(&at, format!("the name \"{name}\" uses characters other than ASCII letters, digits, `_`, `-` and `.`; rename the group"));
            ok = false;
        }
        let Ok(group) = g.group(&name) else {
            c.problem(&at, "is not a group; every member of /observables must be a group with values, shots and spectrum_min/spectrum_max");
            out = None;
            continue;
        };
        let (obs, summary) = read_one(c, &group, &at, &name, ctx);
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
            (Some(o), true, Some(v)) => v.push(o),
            _ => out = None,
        }
    }
    out
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

fn read_one(
    c: &mut Collector,
    g: &Group,
    at: &str,
    name: &str,
    ctx: &Context,
) -> (Option<Observable>, ObservableSummary) {
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
    let values = match open_dataset(c, g, at, "values") {
        None => {
            if !g.link_exists("values") {
                c.problem(&values_path, "is missing; add the estimates of the observable as a realizations × times float dataset");
            }
            None
        }
        Some(ds) => f64_dataset(c, &ds, &values_path).and_then(|(a, stored)| {
            s.stored_as = Some(stored.describe().to_string());
            let v = two_d(c, a, &values_path, ctx.n_times, None)?;
            s.shape = Some([v.nrows(), v.ncols()]);
            if v.nrows() == 0 {
                c.problem(
                    &values_path,
                    "has no realizations (0 rows); store at least one",
                );
                return None;
            }
            if let Some(m) = checks::check_finite_2d(v.view()) {
                c.problem(&values_path, m);
            }
            if let Some((lo, hi)) = spectrum {
                let tol = checks::range_tolerance(lo, hi, stored.relative_rounding());
                if let Some(m) =
                    checks::check_in_range(checks::indexed_2d(v.view()), lo, hi, tol, "value")
                {
                    c.problem(&values_path, m);
                }
            }
            Some(v)
        }),
    };
    let dims = values.as_ref().map(|v| v.dim());

    let shots = read_shots(c, g, at, dims, ctx.n_times, &mut s);

    // Standard errors.
    let stderr_path = format!("{at}/stderr");
    let stderr = open_dataset(c, g, at, "stderr").and_then(|ds| {
        s.has_stderr = true;
        let (a, _) = f64_dataset(c, &ds, &stderr_path)?;
        let v = two_d(c, a, &stderr_path, ctx.n_times, dims.map(|d| d.0))?;
        if let Some(m) = checks::check_finite_2d(v.view()) {
            c.problem(&stderr_path, m);
        } else if let Some(((r, k), x)) = v.indexed_iter().find(|(_, x)| **x < 0.0) {
            c.problem(&stderr_path, format!("standard error {x} at [realization, time] = [{r}, {k}] is negative; standard errors are ≥ 0"));
        }
        Some(v)
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

    // Support.
    let support = match int_vec_attr(c, g, at, "support") {
        None if open_attr(g, "support").is_some() => None,
        None => Some(Vec::new()),
        Some(raw) => match checks::check_support(&raw, ctx.n_sites) {
            Ok(v) => Some(v),
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

    if c.problems.len() > before {
        return (None, s);
    }
    let (Some(values), Some(shots), Some(support), Some((lo, hi)), Some(terms)) =
        (values, shots, support, spectrum, terms)
    else {
        return (None, s);
    };
    let obs = Observable {
        name: name.to_string(),
        values,
        shots,
        stderr,
        ideal,
        support,
        spectrum_min: lo,
        spectrum_max: hi,
        description,
        terms,
    };
    (Some(obs), s)
}

/// Converts a read dataset to R × T, checking T against /times and R against `rows`.
fn two_d(
    c: &mut Collector,
    a: ArrayD<f64>,
    path: &str,
    n_times: Option<usize>,
    rows: Option<usize>,
) -> Option<Array2<f64>> {
    let shape = a.shape().to_vec();
    let Ok(v) = a.into_dimensionality::<Ix2>() else {
        c.problem(
            path,
            format!("has shape {shape:?}; store a 2-D dataset of realizations × times (R × T)"),
        );
        return None;
    };
    if let Some(t) = n_times {
        if v.ncols() != t {
            c.problem(path, format!("has shape {shape:?} but /times holds {t} times; store realizations × times (R × {t}), one column per time"));
            return None;
        }
    }
    if let Some(r) = rows {
        if v.nrows() != r {
            c.problem(path, format!("has shape {shape:?} but values has {r} realizations; give it the shape of values"));
            return None;
        }
    }
    Some(v)
}

fn read_shots(
    c: &mut Collector,
    g: &Group,
    at: &str,
    dims: Option<(usize, usize)>,
    n_times: Option<usize>,
    s: &mut ObservableSummary,
) -> Option<Shots> {
    let path = format!("{at}/shots");
    let attr = open_attr(g, "shots");
    let has_dataset = g.link_exists("shots");
    match (attr, has_dataset) {
        (Some(_), true) => {
            c.problem(
                &path,
                "is given both as an attribute and as a dataset; keep one of them",
            );
            None
        }
        (None, false) => {
            c.problem(&path, "is missing; give the shots behind each estimate as an integer attribute `shots`, or as a realizations × times integer dataset");
            None
        }
        (Some(a), false) => {
            let v = int_values_attr(c, &a, at, "shots")?;
            if v.len() != 1 {
                attr_problem(
                    c,
                    at,
                    "shots",
                    format!(
                        "holds {} values; store one integer, or use a dataset for shots per point",
                        v.len()
                    ),
                );
                return None;
            }
            let n = v[0];
            s.shots = Some(ShotsSummary {
                per_point: false,
                min: n.clamp(i64::MIN.into(), i64::MAX.into()) as i64,
                max: n.clamp(i64::MIN.into(), i64::MAX.into()) as i64,
            });
            if n < 1 || n > i128::from(u64::MAX) {
                attr_problem(
                    c,
                    at,
                    "shots",
                    format!("is {n}; every estimate rests on at least 1 shot"),
                );
                return None;
            }
            Some(Shots::Uniform(n as u64))
        }
        (None, true) => {
            let ds = open_dataset(c, g, at, "shots")?;
            let a = int_dataset(c, &ds, &path)?;
            let shape = a.shape().to_vec();
            let Ok(a) = a.into_dimensionality::<Ix2>() else {
                c.problem(
                    &path,
                    format!("has shape {shape:?}; store shots as realizations × times like values"),
                );
                return None;
            };
            let lo = a.iter().copied().min().unwrap_or(0);
            let hi = a.iter().copied().max().unwrap_or(0);
            s.shots = Some(ShotsSummary {
                per_point: true,
                min: lo.clamp(i64::MIN.into(), i64::MAX.into()) as i64,
                max: hi.clamp(i64::MIN.into(), i64::MAX.into()) as i64,
            });
            let expected = dims.or(n_times.map(|t| (a.nrows(), t)));
            if let Some((r, t)) = expected {
                if a.dim() != (r, t) {
                    c.problem(&path, format!("has shape {shape:?} but values is [{r}, {t}]; give shots the shape of values"));
                    return None;
                }
            }
            if let Some(((r, k), n)) = a
                .indexed_iter()
                .find(|(_, &n)| n < 1 || n > i128::from(u64::MAX))
            {
                let count = a.iter().filter(|&&n| n < 1).count();
                c.problem(&path, format!("{count} shot count(s) are below 1 (first {n} at [realization, time] = [{r}, {k}]); every estimate rests on at least 1 shot"));
                return None;
            }
            Some(Shots::PerPoint(a.mapv(|n| n as u64)))
        }
    }
}

/// The optional term structure; `Some(None)` when absent, `None` when broken.
fn read_terms(
    c: &mut Collector,
    g: &Group,
    at: &str,
    ctx: &Context,
    spectrum: Option<(f64, f64)>,
    support: Option<&[usize]>,
    s: &mut ObservableSummary,
) -> Option<Option<Terms>> {
    let names = ["terms_support", "terms_weight", "terms_spectrum"];
    let present: Vec<bool> = names.iter().map(|n| g.link_exists(n)).collect();
    if present.iter().all(|p| !p) {
        return Some(None);
    }
    if !present.iter().all(|p| *p) {
        let missing: Vec<&str> = names
            .iter()
            .zip(&present)
            .filter(|(_, p)| !**p)
            .map(|(n, _)| *n)
            .collect();
        c.problem(at, format!("has a partial term structure: {} missing; give terms_support, terms_weight and terms_spectrum together, or none of them", missing.join(", ")));
        return None;
    }
    let sup_path = format!("{at}/terms_support");
    let w_path = format!("{at}/terms_weight");
    let sp_path = format!("{at}/terms_spectrum");

    let supports = open_dataset(c, g, at, "terms_support")
        .and_then(|ds| int_dataset(c, &ds, &sup_path))
        .and_then(|a| {
            let shape = a.shape().to_vec();
            let Ok(a) = a.into_dimensionality::<Ix2>() else {
                c.problem(&sup_path, format!("has shape {shape:?}; store an A × m integer dataset, one row of sites per term, padded with -1"));
                return None;
            };
            if a.nrows() == 0 || a.ncols() == 0 {
                c.problem(&sup_path, format!("has shape {shape:?}; give at least one term with at least one site"));
                return None;
            }
            let mut rows = Vec::with_capacity(a.nrows());
            for (i, row) in a.rows().into_iter().enumerate() {
                match checks::parse_term_row(&row.to_vec(), ctx.n_sites) {
                    Ok(r) => rows.push(r),
                    Err(m) => {
                        c.problem(&sup_path, format!("row {i} (term {i}) {m}"));
                        return None;
                    }
                }
            }
            if let Some(sup) = support.filter(|s| !s.is_empty()) {
                if let Some((i, site)) = rows.iter().enumerate().find_map(|(i, r)| r.iter().find(|x| sup.binary_search(x).is_err()).map(|x| (i, *x))) {
                    c.problem(&sup_path, format!("term {i} acts on site {site}, which is outside the observable's support {sup:?}; every term must lie inside the support"));
                    return None;
                }
            }
            Some(rows)
        });
    s.terms = supports.as_ref().map(Vec::len);
    let n_terms = supports.as_ref().map(Vec::len);

    let weights = open_dataset(c, g, at, "terms_weight")
        .and_then(|ds| f64_dataset(c, &ds, &w_path))
        .and_then(|(a, _)| {
            let shape = a.shape().to_vec();
            let Ok(v) = a.into_dimensionality::<Ix1>() else {
                c.problem(&w_path, format!("has shape {shape:?}; store one weight per term as a vector"));
                return None;
            };
            if let Some(n) = n_terms.filter(|&n| n != v.len()) {
                c.problem(&w_path, format!("has {} weights but terms_support lists {n} terms; give one weight per term", v.len()));
                return None;
            }
            if let Some(k) = v.iter().position(|x| !x.is_finite()) {
                c.problem(&w_path, format!("weight {k} is NaN or infinite; give finite weights"));
                return None;
            }
            Some(v.to_vec())
        });

    let spectra = open_dataset(c, g, at, "terms_spectrum")
        .and_then(|ds| f64_dataset(c, &ds, &sp_path))
        .and_then(|(a, _)| {
            let shape = a.shape().to_vec();
            let v = match a.into_dimensionality::<Ix2>() {
                Ok(v) if v.ncols() == 2 => v,
                _ => {
                    c.problem(&sp_path, format!("has shape {shape:?}; store an A × 2 dataset of [min, max] per term"));
                    return None;
                }
            };
            if let Some(n) = n_terms.filter(|&n| n != v.nrows()) {
                c.problem(&sp_path, format!("has {} rows but terms_support lists {n} terms; give one [min, max] per term", v.nrows()));
                return None;
            }
            let rows: Vec<[f64; 2]> = v.rows().into_iter().map(|r| [r[0], r[1]]).collect();
            if let Some(k) = rows.iter().position(|r| !r[0].is_finite() || !r[1].is_finite() || r[0] > r[1]) {
                c.problem(&sp_path, format!("row {k} is [{}, {}]; each term's spectrum must be finite with min ≤ max", rows[k][0], rows[k][1]));
                return None;
            }
            Some(rows)
        });

    let (supports, weights, spectra) = (supports?, weights?, spectra?);
    if let Some((lo, hi)) = spectrum {
        if let Some(m) = checks::check_terms_consistent(&weights, &spectra, lo, hi) {
            c.problem(at, m);
            return None;
        }
    }
    Some(Some(Terms {
        supports,
        weights,
        spectra,
    }))
}
