//! The shot counts of an observable: one integer attribute, or an R × T integer dataset read in
//! blocks, each count at least 1 (docs/run-format.md, `/observables/<name>`).

use hdf5::Group;
use ndarray::{s, Array2};

use crate::inputs::digest::ContentKind;
use crate::inputs::run_file::access::{
    attr_problem, int_rows, int_storage, int_values_attr, open_attr, open_dataset, read_fix,
    row_blocks, Collector,
};
use crate::inputs::run_file::stream::ContentSink;
use crate::inputs::run_file::{ObservableSummary, ShotsSummary};
use crate::model::Shots;

/// Shots of one observable and, for a dataset, `Σ_r 1/S[r, k]` per time (realization order).
#[allow(clippy::too_many_arguments)]
pub(super) fn read_shots(
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
