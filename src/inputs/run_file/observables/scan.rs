//! The block-by-block scan of an R × T float dataset: every block checked (finite, in range),
//! summed per time in realization order, handed to the content sink, and kept in recycled
//! storage when the caller keeps the observable (docs/run-format.md, "Storage rules").

use hdf5::Dataset;
use ndarray::Array2;

use crate::inputs::digest::ContentKind;
use crate::inputs::run_file::access::{f64_rows, f64_rows_into, read_fix, row_blocks, Collector};
use crate::inputs::run_file::checks;
use crate::inputs::run_file::stream::ContentSink;

use super::*;

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
pub(super) struct Scanned {
    pub(super) sums: Vec<f64>,
    pub(super) kept: Option<Array2<f64>>,
}

/// Reads an R × T float dataset of shape `(rows, cols)` in row blocks: each block is checked
/// (`check(r0, block, extent)`, the extent taken in the pass that sums the block per time
/// through `f`, in realization order), passed to `sink`
/// and kept if `keep`. `None` if a block cannot be read (a problem is recorded).
#[allow(clippy::too_many_arguments)]
pub(super) fn scan_floats(
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
pub(super) fn check_2d(
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
