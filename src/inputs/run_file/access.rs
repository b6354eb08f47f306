//! Typed access to HDF5 attributes and datasets that turns every failure into a [`Problem`].
//!
//! The layout allows what h5py and other writers commonly produce: strings variable- or
//! fixed-length, ASCII or UTF-8, stored as a scalar or a one-element array; integers of any
//! width and signedness; floats of any width and byte order. A float item may also be stored as
//! an integer (h5py stores `attrs['spectrum_min'] = -1` as int64); integers convert to `f64`
//! exactly up to 2^53 in magnitude. HDF5 itself undoes byte order, chunking, deflate and
//! shuffle when it reads, so nothing here depends on how a dataset is laid out.

use hdf5::types::{FixedAscii, FixedUnicode, TypeDescriptor, VarLenAscii, VarLenUnicode};
use hdf5::{Attribute, Dataset, Group, Location};
use ndarray::{s, Array2, ArrayD};

use crate::error::Problem;

/// Longest fixed-length string read (bytes); longer ones are reported, not truncated.
const MAX_FIXED_STRING: usize = 16384;

/// How a float item was stored; the range checks allow for the rounding of narrow types.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stored {
    /// float64 or an integer type: no rounding allowance.
    Exact,
    /// A float with `bits` significant bits (float32: 24, float16: 11).
    Narrow { bits: u32 },
}

impl Stored {
    /// The relative rounding of one value stored this way (0 for exact storage).
    pub fn relative_rounding(self) -> f64 {
        match self {
            Stored::Exact => 0.0,
            Stored::Narrow { bits } => 2f64.powi(-(bits as i32)),
        }
    }

    /// The name of the type for summaries.
    pub fn describe(self) -> &'static str {
        match self {
            Stored::Exact => "float64",
            Stored::Narrow { bits: 24 } => "float32",
            Stored::Narrow { .. } => "float16",
        }
    }
}

/// Collects the problems (errors) and notes (ignored items) of one file.
#[derive(Debug, Default)]
pub struct Collector {
    pub problems: Vec<Problem>,
    pub notes: Vec<Problem>,
}

impl Collector {
    /// Records a problem at `path`.
    pub fn problem(&mut self, path: impl Into<String>, message: impl Into<String>) {
        self.problems.push(Problem::new(path, message));
    }

    /// Records a note (not an error) at `path`.
    pub fn note(&mut self, path: impl Into<String>, message: impl Into<String>) {
        self.notes.push(Problem::new(path, message));
    }
}

/// Records a problem with attribute `name` of the object at `at` (the problem's path is the
/// object's; the message names the attribute).
pub fn attr_problem(c: &mut Collector, at: &str, name: &str, message: impl std::fmt::Display) {
    c.problem(at, format!("attribute `{name}` {message}"));
}

/// The fix for an HDF5 read that failed with `e`: when HDF5's words say the stored bytes are
/// damaged (a compressed chunk that does not inflate, a checksum that fails, an address past
/// the end of the file), rewriting the item with another type cannot help, so the message says
/// the file is corrupt; otherwise `otherwise` (a storage change) is the fix.
pub fn read_fix(e: &hdf5::Error, otherwise: &str) -> String {
    const DAMAGE: [&str; 11] = [
        "inflate",
        "filter",
        "checksum",
        "eoa",
        "addr overflow",
        "address overflow",
        "truncated",
        "corrupt",
        "bad ",
        "signature",
        "b-tree",
    ];
    let words = e.to_string().to_lowercase();
    if DAMAGE.iter().any(|d| words.contains(d)) {
        "the stored bytes are damaged (the file is corrupt or was cut short); copy the file \
         again from its source, or write it again"
            .to_string()
    } else {
        otherwise.to_string()
    }
}

/// `path` of member `name` of the group at `at`.
pub fn child_path(at: &str, name: &str) -> String {
    if at == "/" {
        format!("/{name}")
    } else {
        format!("{at}/{name}")
    }
}

/// Records a note for every attribute and member of `group` that layout v1 does not define.
pub fn note_unknown(c: &mut Collector, group: &Group, at: &str, attrs: &[&str], members: &[&str]) {
    let mut found: Vec<String> = group.attr_names().unwrap_or_default();
    found.sort();
    for a in found.iter().filter(|a| !attrs.contains(&a.as_str())) {
        c.note(
            at,
            format!(
                "attribute `{a}` is not part of layout v1 and was ignored (check its spelling)"
            ),
        );
    }
    let mut found: Vec<String> = group.member_names().unwrap_or_default();
    found.sort();
    for m in found.iter().filter(|m| !members.contains(&m.as_str())) {
        c.note(
            child_path(at, m),
            "is not part of layout v1 and was ignored (check its spelling)",
        );
    }
}

/// Opens the group `name` under `parent`, recording a problem if it is missing or not a group.
pub fn open_group(
    c: &mut Collector,
    parent: &Group,
    at: &str,
    name: &str,
    fix: &str,
) -> Option<Group> {
    let path = child_path(at, name);
    if !parent.link_exists(name) {
        c.problem(path, format!("is missing; {fix}"));
        return None;
    }
    match parent.group(name) {
        Ok(g) => Some(g),
        Err(_) => {
            c.problem(path, format!("is not a group; {fix}"));
            None
        }
    }
}

fn descriptor_of(dtype: hdf5::Result<hdf5::Datatype>) -> Option<TypeDescriptor> {
    dtype.ok().and_then(|t| t.to_descriptor().ok())
}

fn type_words(d: &Option<TypeDescriptor>) -> String {
    match d {
        Some(d) => format!("{d}"),
        None => "an unsupported type".to_string(),
    }
}

/// Opens attribute `name` of `loc`; `None` if it does not exist (no problem recorded).
pub fn open_attr(loc: &Location, name: &str) -> Option<Attribute> {
    if !loc.attr_names().is_ok_and(|n| n.iter().any(|x| x == name)) {
        return None;
    }
    loc.attr(name).ok()
}

/// Reads a string attribute; records a problem if it is present but not one string, and (if
/// `required`) if it is missing.
pub fn string_attr(
    c: &mut Collector,
    loc: &Location,
    at: &str,
    name: &str,
    required: Option<&str>,
) -> Option<String> {
    let Some(attr) = open_attr(loc, name) else {
        if let Some(fix) = required {
            attr_problem(c, at, name, format!("is missing; {fix}"));
        }
        return None;
    };
    if attr.size() != 1 {
        attr_problem(
            c,
            at,
            name,
            format!("holds {} values; store a single string", attr.size()),
        );
        return None;
    }
    let d = descriptor_of(attr.dtype());
    let read = match &d {
        Some(TypeDescriptor::VarLenUnicode) => attr
            .read_raw::<VarLenUnicode>()
            .map(|v| v.first().map(|s| s.as_str().to_string())),
        Some(TypeDescriptor::VarLenAscii) => attr
            .read_raw::<VarLenAscii>()
            .map(|v| v.first().map(|s| s.as_str().to_string())),
        Some(TypeDescriptor::FixedAscii(n)) if *n <= MAX_FIXED_STRING => attr
            .read_raw::<FixedAscii<MAX_FIXED_STRING>>()
            .map(|v| v.first().map(|s| s.as_str().to_string())),
        Some(TypeDescriptor::FixedUnicode(n)) if *n <= MAX_FIXED_STRING => attr
            .read_raw::<FixedUnicode<MAX_FIXED_STRING>>()
            .map(|v| v.first().map(|s| s.as_str().to_string())),
        Some(TypeDescriptor::FixedAscii(n)) | Some(TypeDescriptor::FixedUnicode(n)) => {
            attr_problem(c, at, name,
                format!("is a fixed-length string of {n} bytes, more than the {MAX_FIXED_STRING} supported; store it as a variable-length string"),
            );
            return None;
        }
        _ => {
            attr_problem(
                c,
                at,
                name,
                format!(
                    "must be a string but is {}; store it as a string",
                    type_words(&d)
                ),
            );
            return None;
        }
    };
    match read {
        Ok(Some(s)) => Some(s),
        Ok(None) => {
            attr_problem(c, at, name, "holds no value; store a single string");
            None
        }
        Err(e) => {
            attr_problem(
                c,
                at,
                name,
                format!(
                    "cannot be read as a string ({e}); {}",
                    read_fix(&e, "rewrite it as a variable-length UTF-8 string")
                ),
            );
            None
        }
    }
}

/// Reads every integer of an attribute (scalar or vector), widened to `i128` so that signed
/// and unsigned 64-bit values both fit.
pub fn int_values_attr(
    c: &mut Collector,
    attr: &Attribute,
    at: &str,
    name: &str,
) -> Option<Vec<i128>> {
    let d = descriptor_of(attr.dtype());
    let read = match &d {
        Some(TypeDescriptor::Integer(_)) => attr
            .read_raw::<i64>()
            .map(|v| v.into_iter().map(i128::from).collect()),
        Some(TypeDescriptor::Unsigned(_)) => attr
            .read_raw::<u64>()
            .map(|v| v.into_iter().map(i128::from).collect()),
        _ => {
            attr_problem(
                c,
                at,
                name,
                format!(
                    "must be an integer but is {}; store it as an integer",
                    type_words(&d)
                ),
            );
            return None;
        }
    };
    match read {
        Ok(v) => Some(v),
        Err(e) => {
            attr_problem(
                c,
                at,
                name,
                format!(
                    "cannot be read as integers ({e}); {}",
                    read_fix(&e, "rewrite it as int64")
                ),
            );
            None
        }
    }
}

/// Reads a single integer attribute; missing is a problem if `required` (the fix) is given.
pub fn int_attr(
    c: &mut Collector,
    loc: &Location,
    at: &str,
    name: &str,
    required: Option<&str>,
) -> Option<i128> {
    let Some(attr) = open_attr(loc, name) else {
        if let Some(fix) = required {
            attr_problem(c, at, name, format!("is missing; {fix}"));
        }
        return None;
    };
    let v = int_values_attr(c, &attr, at, name)?;
    if v.len() != 1 {
        attr_problem(
            c,
            at,
            name,
            format!("holds {} values; store a single integer", v.len()),
        );
        return None;
    }
    Some(v[0])
}

/// Reads an integer-vector attribute (a scalar counts as a vector of one); `None` if missing.
pub fn int_vec_attr(c: &mut Collector, loc: &Location, at: &str, name: &str) -> Option<Vec<i128>> {
    let attr = open_attr(loc, name)?;
    int_values_attr(c, &attr, at, name)
}

/// Reads a single float attribute (float or integer storage); missing is a problem if
/// `required`. Finiteness is left to the caller.
pub fn f64_attr(
    c: &mut Collector,
    loc: &Location,
    at: &str,
    name: &str,
    required: Option<&str>,
) -> Option<f64> {
    let Some(attr) = open_attr(loc, name) else {
        if let Some(fix) = required {
            attr_problem(c, at, name, format!("is missing; {fix}"));
        }
        return None;
    };
    let d = descriptor_of(attr.dtype());
    if !matches!(
        d,
        Some(TypeDescriptor::Float(_) | TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_))
    ) {
        attr_problem(
            c,
            at,
            name,
            format!(
                "must be a number but is {}; store it as float64",
                type_words(&d)
            ),
        );
        return None;
    }
    match attr.read_raw::<f64>() {
        Ok(v) if v.len() == 1 => Some(v[0]),
        Ok(v) => {
            attr_problem(
                c,
                at,
                name,
                format!("holds {} values; store a single float64", v.len()),
            );
            None
        }
        Err(e) => {
            attr_problem(
                c,
                at,
                name,
                format!(
                    "cannot be read as a number ({e}); {}",
                    read_fix(&e, "store it as float64")
                ),
            );
            None
        }
    }
}

/// Opens dataset `name` of `group`; `None` if there is no such link (no problem recorded), a
/// problem if the link is not a dataset.
pub fn open_dataset(c: &mut Collector, group: &Group, at: &str, name: &str) -> Option<Dataset> {
    if !group.link_exists(name) {
        return None;
    }
    match group.dataset(name) {
        Ok(d) => Some(d),
        Err(_) => {
            c.problem(
                child_path(at, name),
                "is not a dataset (a group or a broken link?); store the data as a dataset",
            );
            None
        }
    }
}

/// Reads a float dataset (float or integer storage) of any rank, with how it was stored.
pub fn f64_dataset(c: &mut Collector, ds: &Dataset, path: &str) -> Option<(ArrayD<f64>, Stored)> {
    let stored = float_storage(c, ds, path)?;
    match ds.read_dyn::<f64>() {
        Ok(a) => Some((a, stored)),
        Err(e) => {
            c.problem(
                path,
                format!(
                    "cannot be read ({e}); {}",
                    read_fix(&e, "rewrite it as float64")
                ),
            );
            None
        }
    }
}

/// Values per row block of the streaming reads: 128 Ki values, 1 MiB as float64.
const BLOCK_VALUES: usize = 1 << 17;

/// The row blocks `[r0, r1)` in which an R × T dataset is read: about 1 MiB each, at least
/// one row.
pub fn row_blocks(rows: usize, cols: usize) -> impl Iterator<Item = (usize, usize)> {
    let step = (BLOCK_VALUES / cols.max(1)).max(1);
    (0..rows)
        .step_by(step)
        .map(move |r0| (r0, (r0 + step).min(rows)))
}

/// Rows `[r0, r1)` of a 2-D float dataset, as float64 (HDF5 converts the stored type).
pub fn f64_rows(ds: &Dataset, r0: usize, r1: usize) -> hdf5::Result<Array2<f64>> {
    ds.read_slice_2d::<f64, _>(s![r0..r1, ..])
}

/// Rows `[r0, r1)` of a 2-D float dataset of `cols` columns, as float64 (HDF5 converts the
/// stored type), read into `out`, which must hold exactly `(r1 − r0) · cols` values: the
/// rows land where they are kept, with no copy (the `hdf5` crate reads a selection only into
/// storage of its own). The dataset's type was checked to be a float type before
/// (`float_storage`), so HDF5's conversion to float64 is exact.
pub fn f64_rows_into(
    ds: &Dataset,
    (r0, r1): (usize, usize),
    cols: usize,
    out: &mut [f64],
) -> hdf5::Result<()> {
    if r1 < r0 || out.len() != (r1 - r0) * cols {
        return Err(hdf5::Error::from(format!(
            "internal: {} values of storage for rows {r0}..{r1} of {cols} columns",
            out.len()
        )));
    }
    let rows: hdf5::Selection = s![r0..r1, ..].try_into()?;
    let file_space = ds.space()?.select(rows)?;
    let memory_space = hdf5::Dataspace::try_new([r1 - r0, cols])?;
    let memory_type = hdf5::Datatype::from_type::<f64>()?;
    hdf5::sync::sync(|| {
        // SAFETY: `out` is exactly as long as the memory space selects (checked above), of
        // the memory type's size (8 bytes per float64), and borrowed mutably for the call;
        // the identifiers are of objects alive for the whole call; HDF5 calls are serialised
        // by the crate's lock, which this holds.
        let status = unsafe {
            hdf5_sys::h5d::H5Dread(
                ds.id(),
                memory_type.id(),
                memory_space.id(),
                file_space.id(),
                hdf5_sys::h5p::H5P_DEFAULT,
                out.as_mut_ptr().cast(),
            )
        };
        hdf5::h5check(status).map(|_| ())
    })
}

/// Rows `[r0, r1)` of a 2-D integer dataset, widened to `i128`; `signed` says how it is
/// stored (from [`int_storage`]).
pub fn int_rows(ds: &Dataset, signed: bool, r0: usize, r1: usize) -> hdf5::Result<Array2<i128>> {
    if signed {
        Ok(ds.read_slice_2d::<i64, _>(s![r0..r1, ..])?.mapv(i128::from))
    } else {
        Ok(ds.read_slice_2d::<u64, _>(s![r0..r1, ..])?.mapv(i128::from))
    }
}

/// Whether an integer dataset is stored signed; a problem if it does not hold integers.
pub fn int_storage(c: &mut Collector, ds: &Dataset, path: &str) -> Option<bool> {
    let d = descriptor_of(ds.dtype());
    match &d {
        Some(TypeDescriptor::Integer(_)) => Some(true),
        Some(TypeDescriptor::Unsigned(_)) => Some(false),
        _ => {
            c.problem(
                path,
                format!(
                    "must hold integers but holds {}; store it as int64",
                    type_words(&d)
                ),
            );
            None
        }
    }
}

/// How a float dataset is stored; a problem if it does not hold numbers.
pub fn float_storage(c: &mut Collector, ds: &Dataset, path: &str) -> Option<Stored> {
    let d = descriptor_of(ds.dtype());
    let stored = match &d {
        // Significant bits by storage size: binary64, binary32, binary16 (IEEE 754).
        Some(TypeDescriptor::Float(_)) => match ds.dtype().map(|t| t.size()).unwrap_or(8) {
            8.. => Stored::Exact,
            4..=7 => Stored::Narrow { bits: 24 },
            _ => Stored::Narrow { bits: 11 },
        },
        Some(TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_)) => Stored::Exact,
        _ => {
            c.problem(
                path,
                format!(
                    "must hold numbers but holds {}; store float64 or float32",
                    type_words(&d)
                ),
            );
            return None;
        }
    };
    Some(stored)
}

/// Reads an integer dataset of any rank, widened to `i128`.
pub fn int_dataset(c: &mut Collector, ds: &Dataset, path: &str) -> Option<ArrayD<i128>> {
    let d = descriptor_of(ds.dtype());
    let read = match &d {
        Some(TypeDescriptor::Integer(_)) => ds.read_dyn::<i64>().map(|a| a.mapv(i128::from)),
        Some(TypeDescriptor::Unsigned(_)) => ds.read_dyn::<u64>().map(|a| a.mapv(i128::from)),
        _ => {
            c.problem(
                path,
                format!(
                    "must hold integers but holds {}; store it as int64",
                    type_words(&d)
                ),
            );
            return None;
        }
    };
    match read {
        Ok(a) => Some(a),
        Err(e) => {
            c.problem(
                path,
                format!(
                    "cannot be read ({e}); {}",
                    read_fix(&e, "rewrite it as int64")
                ),
            );
            None
        }
    }
}
