//! The `/observables/<name>` groups of layout v1: values, shots, errors, supports, spectra and
//! the optional term structure, checked against the run (`n_sites`, T) and against each other
//! (every observable has the same realizations R).
//!
//! The R × T datasets are read in row blocks (about 1 MiB each): every block is checked,
//! summed per time (what the bounds need) and passed to a [`ContentSink`], then dropped unless
//! the caller keeps the whole observable. So memory does not grow with R × T × K. A sink that
//! takes kept datasets whole ([`ContentSink::takes_kept_floats`], as `certify`'s does) gets
//! them read straight into the kept storage instead, block by block, with no copy.

use hdf5::{Dataset, Group};
use ndarray::{s, Array2, Ix1, Ix2};

use super::access::{
    attr_problem, f64_attr, f64_dataset, f64_rows, f64_rows_into, float_storage, int_dataset,
    int_rows, int_storage, int_values_attr, int_vec_attr, note_unknown, open_attr, open_dataset,
    open_group, read_fix, row_blocks, string_attr, Collector,
};
use super::checks;
use super::stream::{ContentSink, ObservableOutline, ObservableRead};
use super::{ObservableSummary, RunSummary, ShotsSummary};
use crate::inputs::digest::ContentKind;
use crate::model::sums::{ObservableSums, ShotSums};
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

/// Hands back the storage of kept values (of an observable read whole, which its caller or a
/// sink is done with) for the next observable read on this thread.
pub fn recycle_storage(v: Vec<f64>) {
    SPARE.with(|s| s.set(v));
}

/// Empty storage for `len` values, recycled when there is some (filled block by block, so
/// nothing is written twice).
fn kept_storage(len: usize) -> Vec<f64> {
    let mut v = SPARE.with(|s| s.take());
    v.clear();
    v.reserve_exact(len);
    v
}

/// Storage of exactly `len` values to be overwritten by a read: recycled storage keeps its
/// old values (nothing is written twice); only storage that has to grow is zeroed, once.
fn kept_storage_filled(len: usize) -> Vec<f64> {
    let mut v = SPARE.with(|s| s.take());
    v.truncate(len);
    v.resize(len, 0.0);
    v
}

/// A scanned R × T float dataset: per-time sums of `f(value)` and, if kept, the array.
struct Scanned {
    sums: Vec<f64>,
    kept: Option<Array2<f64>>,
}

/// Reads an R × T float dataset of shape `(rows, cols)` in row blocks: each block is checked
/// (`check(r0, block, extent)`, the extent taken in the pass that sums the block per time
/// through `f`, in realization order), passed to `sink`
/// and kept if `keep`. `None` if a block cannot be read (a problem is recorded).
#[allow(clippy::too_many_arguments)]
fn scan_floats(
    c: &mut Collector,
    ds: &Dataset,
    path: &str,
    (rows, cols): (usize, usize),
    keep: bool,
    sink: &mut dyn ContentSink,
    f: impl Fn(f64) -> f64,
    check: &mut dyn FnMut(usize, ndarray::ArrayView2<f64>, &checks::BlockExtent),
) -> Option<Scanned> {
    let mut sums = vec![0.0; cols];
    let mut extent = checks::ExtentColumns::new(cols);
    if keep && sink.takes_kept_floats() {
        return scan_whole(c, ds, path, (rows, cols), f, check, sums, extent);
    }
    let mut kept = keep.then(|| kept_storage(rows * cols));
    sink.begin(path, ContentKind::F64, &[rows, cols]);
    for (r0, r1) in row_blocks(rows, cols) {
        let block = match f64_rows(ds, r0, r1) {
            Ok(b) => b.as_standard_layout().into_owned(),
            Err(e) => {
                sink.end();
                unreadable(c, path, &e);
                return None;
            }
        };
        let xs = block.as_slice().unwrap_or(&[]);
        let e = sum_block(xs, cols, &f, &mut sums, &mut extent);
        check(r0, block.view(), &e);
        if let (Some(k), Some(xs)) = (kept.as_mut(), block.as_slice()) {
            k.extend_from_slice(xs);
        }
        sink.floats_owned(block.into_raw_vec_and_offset().0);
    }
    sink.end();
    let kept = match kept.map(|v| Array2::from_shape_vec((rows, cols), v)) {
        None => None,
        Some(Ok(a)) => Some(a),
        Some(Err(e)) => {
            c.problem(
                path,
                format!("was read incompletely ({e}); please report this as a bug in quassay"),
            );
            return None;
        }
    };
    Some(Scanned { sums, kept })
}

/// One pass over a block of rows of `cols` values: adds them to the per-time `sums` through
/// `f`, in realization order (the same operations whichever reader calls it), and takes the
/// extent the checks need (finite, smallest, largest).
fn sum_block(
    xs: &[f64],
    cols: usize,
    f: &impl Fn(f64) -> f64,
    sums: &mut [f64],
    extent: &mut checks::ExtentColumns,
) -> checks::BlockExtent {
    extent.reset();
    if cols > 0 {
        for row in xs.chunks_exact(cols) {
            for (s, &x) in sums.iter_mut().zip(row) {
                *s += f(x);
            }
            extent.push_row(row);
        }
    }
    extent.extent()
}

/// Records that the float dataset at `path` could not be read.
fn unreadable(c: &mut Collector, path: &str, e: &hdf5::Error) {
    c.problem(
        path,
        format!(
            "cannot be read ({e}); {}",
            read_fix(e, "rewrite it as float64")
        ),
    );
}

/// [`scan_floats`] for a dataset kept whole whose content the sink takes from the kept
/// array: each row block is read straight into its place in the kept storage (no block
/// copies), then checked and summed as [`scan_floats`] does while it is still in the cache,
/// with the same operations in the same order (so the same sums, to the bit).
#[allow(clippy::too_many_arguments)]
fn scan_whole(
    c: &mut Collector,
    ds: &Dataset,
    path: &str,
    (rows, cols): (usize, usize),
    f: impl Fn(f64) -> f64,
    check: &mut dyn FnMut(usize, ndarray::ArrayView2<f64>, &checks::BlockExtent),
    mut sums: Vec<f64>,
    mut extent: checks::ExtentColumns,
) -> Option<Scanned> {
    let mut values = kept_storage_filled(rows * cols);
    for (r0, r1) in row_blocks(rows, cols) {
        let xs = &mut values[r0 * cols..r1 * cols];
        if let Err(e) = f64_rows_into(ds, (r0, r1), cols, xs) {
            recycle_storage(values);
            unreadable(c, path, &e);
            return None;
        }
        let e = sum_block(xs, cols, &f, &mut sums, &mut extent);
        if let Ok(block) = ndarray::ArrayView2::from_shape((r1 - r0, cols), &*xs) {
            check(r0, block, &e);
        }
    }
    match Array2::from_shape_vec((rows, cols), values) {
        Ok(a) => Some(Scanned {
            sums,
            kept: Some(a),
        }),
        Err(e) => {
            c.problem(
                path,
                format!("was read incompletely ({e}); please report this as a bug in quassay"),
            );
            None
        }
    }
}

/// Checks the shape of an R × T dataset: 2-D, T columns (against /times), `rows` rows.
fn check_2d(
    c: &mut Collector,
    shape: &[usize],
    path: &str,
    n_times: Option<usize>,
    rows: Option<usize>,
) -> Option<(usize, usize)> {
    if shape.len() != 2 {
        c.problem(
            path,
            format!("has shape {shape:?}; store a 2-D dataset of realizations × times (R × T)"),
        );
        return None;
    }
    if let Some(t) = n_times {
        if shape[1] != t {
            c.problem(path, format!("has shape {shape:?} but /times holds {t} times; store realizations × times (R × {t}), one column per time"));
            return None;
        }
    }
    if let Some(r) = rows {
        if shape[0] != r {
            c.problem(path, format!("has shape {shape:?} but values has {r} realizations; give it the shape of values"));
            return None;
        }
    }
    Some((shape[0], shape[1]))
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
    let values = match open_dataset(c, g, at, "values") {
        None => {
            if !g.link_exists("values") {
                c.problem(&values_path, "is missing; add the estimates of the observable as a realizations × times float dataset");
            }
            None
        }
        Some(ds) => float_storage(c, &ds, &values_path).and_then(|stored| {
            s.stored_as = Some(stored.describe().to_string());
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

/// Shots of one observable and, for a dataset, `Σ_r 1/S[r, k]` per time (realization order).
#[allow(clippy::too_many_arguments)]
fn read_shots(
    c: &mut Collector,
    g: &Group,
    at: &str,
    dims: Option<(usize, usize)>,
    n_times: Option<usize>,
    keep: bool,
    sink: &mut dyn ContentSink,
    s: &mut ObservableSummary,
) -> Option<(Shots, Option<Vec<f64>>)> {
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
            Some((Shots::Uniform(n as u64), None))
        }
        (None, true) => {
            let ds = open_dataset(c, g, at, "shots")?;
            let signed = int_storage(c, &ds, &path)?;
            let shape = ds.shape();
            if shape.len() != 2 {
                c.problem(
                    &path,
                    format!("has shape {shape:?}; store shots as realizations × times like values"),
                );
                return None;
            }
            let (rows, cols) = (shape[0], shape[1]);
            let mut lo: Option<i128> = None;
            let mut hi: Option<i128> = None;
            let mut low_count = 0usize;
            let mut first_low: Option<(i128, usize, usize)> = None;
            let mut inv = vec![0.0; cols];
            let mut kept = keep.then(|| Array2::<u64>::zeros((rows, cols)));
            let mut encoded: Vec<i64> = Vec::new();
            sink.begin(&path, ContentKind::I64, &[rows, cols]);
            for (r0, r1) in row_blocks(rows, cols) {
                let block = match int_rows(&ds, signed, r0, r1) {
                    Ok(b) => b,
                    Err(e) => {
                        sink.end();
                        c.problem(
                            &path,
                            format!(
                                "cannot be read ({e}); {}",
                                read_fix(&e, "rewrite it as int64")
                            ),
                        );
                        return None;
                    }
                };
                for ((r, k), &n) in block.indexed_iter() {
                    lo = Some(lo.map_or(n, |x| x.min(n)));
                    hi = Some(hi.map_or(n, |x| x.max(n)));
                    if n < 1 || n > i128::from(u64::MAX) {
                        if n < 1 {
                            low_count += 1;
                        }
                        first_low.get_or_insert((n, r0 + r, k));
                    }
                }
                for row in block.rows() {
                    for (s, &n) in inv.iter_mut().zip(row.iter()) {
                        *s += 1.0 / (n.clamp(0, i128::from(u64::MAX)) as u64) as f64;
                    }
                }
                encoded.clear();
                encoded.extend(block.iter().map(|&n| {
                    i64::try_from(n.clamp(0, i128::from(u64::MAX)) as u64).unwrap_or(i64::MAX)
                }));
                sink.ints(&encoded);
                if let Some(k) = kept.as_mut() {
                    k.slice_mut(s![r0..r1, ..])
                        .assign(&block.mapv(|n| n.clamp(0, i128::from(u64::MAX)) as u64));
                }
            }
            sink.end();
            s.shots = Some(ShotsSummary {
                per_point: true,
                min: lo.unwrap_or(0).clamp(i64::MIN.into(), i64::MAX.into()) as i64,
                max: hi.unwrap_or(0).clamp(i64::MIN.into(), i64::MAX.into()) as i64,
            });
            let expected = dims.or(n_times.map(|t| (rows, t)));
            if let Some((r, t)) = expected {
                if (rows, cols) != (r, t) {
                    c.problem(&path, format!("has shape {shape:?} but values is [{r}, {t}]; give shots the shape of values"));
                    return None;
                }
            }
            if let Some((n, r, k)) = first_low {
                c.problem(&path, format!("{low_count} shot count(s) are below 1 (first {n} at [realization, time] = [{r}, {k}]); every estimate rests on at least 1 shot"));
                return None;
            }
            let shots = match kept {
                Some(a) => Shots::PerPoint(a),
                // Not kept: an empty array marks per-point shots; the sums carry the data.
                None => Shots::PerPoint(Array2::zeros((0, cols))),
            };
            Some((shots, Some(inv)))
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
