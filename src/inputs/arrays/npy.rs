//! NumPy arrays (`.npy` files, and members of `.npz` archives) read with `ndarray-npy`, widened
//! to `f64` or `i128` whatever their stored dtype, with the words a message needs when an
//! array is unreadable or of the wrong kind.
//!
//! Why widening here: a lab's arrays come as float64, float32 or any integer width (NumPy's
//! defaults differ by platform and by how an array was made), and the description does not say
//! which. Each element type `ndarray-npy` knows is tried in turn; the first whose descriptor
//! matches reads the array. float32 is widened exactly, and its rounding (2^-24) is kept so the
//! range checks allow for it as the run-file reader does.

use std::fs::File;
use std::io::{BufReader, Read};
use std::path::{Path, PathBuf};

use ndarray::ArrayD;
use ndarray_npy::npy::header::Header;
use ndarray_npy::{ReadNpyError, ReadNpyExt, ReadableElement};

/// Where an array comes from: a `.npy` file, or one member of a `.npz` archive.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ArraySource {
    /// A `.npy` file.
    Npy(PathBuf),
    /// The member `array` of the `.npz` archive `file`.
    Npz { file: PathBuf, array: String },
}

impl ArraySource {
    /// The words naming the array in messages: `'z.npy'` or `array 'Z' of 'data.npz'`.
    pub fn describe(&self) -> String {
        match self {
            ArraySource::Npy(p) => format!("array file '{}'", p.display()),
            ArraySource::Npz { file, array } => {
                format!("array '{array}' of '{}'", file.display())
            }
        }
    }
}

/// A float array read from a source.
#[derive(Debug, Clone)]
pub struct FloatArray {
    /// The values, widened to `f64` exactly.
    pub data: ArrayD<f64>,
    /// The relative rounding of the stored type: 0 for float64 and integers, 2^-24 for float32.
    pub rounding: f64,
    /// Whether the stored type was float32.
    pub float32: bool,
}

/// Why an array could not be read: a sentence naming the array and the fix.
pub type ReadFailure = String;

/// The bytes of the `.npy` data of `source` (a whole file, or one member of an archive), with
/// its header checked against their length before anything is allocated by the header's size.
///
/// Only regular files are opened (a FIFO or a device would block or never end). A header that
/// declares more elements than there are bytes is refused here, so that a damaged or hostile
/// file cannot make `ndarray-npy` allocate by its claim.
pub fn npy_bytes(source: &ArraySource) -> Result<Vec<u8>, ReadFailure> {
    let bytes = match source {
        ArraySource::Npy(path) => read_regular_file(path)?,
        ArraySource::Npz { file, array } => {
            let f = File::open(regular(file)?)
                .map_err(|e| format!("cannot open '{}': {e}", file.display()))?;
            let mut zip = zip::ZipArchive::new(BufReader::new(f)).map_err(|e| {
                format!("'{}' is not a readable .npz archive ({e}); write it with numpy.savez or numpy.savez_compressed", file.display())
            })?;
            let names: Vec<String> = zip.file_names().map(str::to_string).collect();
            let member = [array.clone(), format!("{array}.npy")]
                .into_iter()
                .find(|m| names.contains(m));
            let Some(member) = member else {
                let mut shown: Vec<&str> = names
                    .iter()
                    .map(|n| n.strip_suffix(".npy").unwrap_or(n))
                    .collect();
                shown.sort_unstable();
                return Err(format!(
                    "'{}' holds no array '{array}' (it holds: {}); name one of its arrays",
                    file.display(),
                    shown.join(", ")
                ));
            };
            let mut entry = zip.by_name(&member).map_err(|e| {
                format!("array '{array}' of '{}' cannot be read ({e}); write the archive again with numpy.savez", file.display())
            })?;
            let mut out = Vec::new();
            entry.read_to_end(&mut out).map_err(|e| {
                format!("array '{array}' of '{}' cannot be read ({e}); write the archive again with numpy.savez", file.display())
            })?;
            out
        }
    };
    let mut rest = &bytes[..];
    let header = Header::from_reader(&mut rest).map_err(|e| {
        format!(
            "{} is not a NumPy array ({e}); write it with numpy.save (or numpy.savez for an archive)",
            source.describe()
        )
    })?;
    let elements = header
        .shape
        .iter()
        .try_fold(1usize, |acc, &n| acc.checked_mul(n));
    if elements.is_none_or(|n| n > rest.len()) {
        return Err(format!(
            "{} declares the shape {:?} but holds {} bytes of data; the file is cut short or damaged: write it again",
            source.describe(),
            header.shape,
            rest.len()
        ));
    }
    Ok(bytes)
}

fn regular(path: &Path) -> Result<&Path, ReadFailure> {
    match std::fs::metadata(path) {
        Ok(m) if m.is_file() => Ok(path),
        Ok(_) => Err(format!(
            "'{}' is not a regular file; name a .npy or .npz file",
            path.display()
        )),
        Err(e) => Err(format!("cannot open '{}': {e}", path.display())),
    }
}

fn read_regular_file(path: &Path) -> Result<Vec<u8>, ReadFailure> {
    std::fs::read(regular(path)?).map_err(|e| format!("cannot read '{}': {e}", path.display()))
}

/// Reads one attempt: `Ok(Err(dtype))` when the stored dtype (NumPy's descriptor, e.g.
/// `'<c16'`) is not `T`'s.
fn attempt<T: ReadableElement>(
    bytes: &[u8],
    source: &ArraySource,
) -> Result<Result<ArrayD<T>, String>, ReadFailure> {
    match ArrayD::<T>::read_npy(bytes) {
        Ok(a) => Ok(Ok(a)),
        Err(ReadNpyError::WrongDescriptor(d)) => Ok(Err(d.to_string())),
        Err(e) => Err(format!(
            "{} cannot be read ({e}); write it with numpy.save (or numpy.savez for an archive)",
            source.describe()
        )),
    }
}

/// Reads a float array: float64, float32, or integers (converted exactly up to 2^53).
pub fn read_floats(source: &ArraySource) -> Result<FloatArray, ReadFailure> {
    let bytes = npy_bytes(source)?;
    if let Ok(a) = attempt::<f64>(&bytes, source)? {
        return Ok(FloatArray {
            data: a,
            rounding: 0.0,
            float32: false,
        });
    }
    if let Ok(a) = attempt::<f32>(&bytes, source)? {
        return Ok(FloatArray {
            data: a.mapv(f64::from),
            rounding: f64::powi(2.0, -24),
            float32: true,
        });
    }
    let dtype = match read_ints_opt(&bytes, source)? {
        Err(d) => d,
        Ok(a) => return exact_floats(source, a),
    };
    Err(format!(
        "{} is of dtype {dtype}, not float or integer; store it as float64, e.g. numpy.asarray(a, dtype=numpy.float64)",
        source.describe()
    ))
}

/// An integer array as floats, refused if some integer is beyond 2^53 (not exact in float64).
fn exact_floats(source: &ArraySource, a: ArrayD<i128>) -> Result<FloatArray, ReadFailure> {
    if let Some(x) = a.iter().find(|x| x.unsigned_abs() > 1u128 << 53) {
        return Err(format!(
            "{} holds the integer {x}, too large to convert exactly to float64; store it as float64",
            source.describe()
        ));
    }
    Ok(FloatArray {
        data: a.mapv(|x| x as f64),
        rounding: 0.0,
        float32: false,
    })
}

/// Reads an integer array of any width and signedness.
pub fn read_ints(source: &ArraySource) -> Result<ArrayD<i128>, ReadFailure> {
    let bytes = npy_bytes(source)?;
    read_ints_opt(&bytes, source)?.map_err(|dtype| {
        format!(
            "{} is of dtype {dtype}, not integer; store it as int64, e.g. numpy.asarray(a, dtype=numpy.int64)",
            source.describe()
        )
    })
}

/// Tries every integer width; `Ok(Err(dtype))` when none matches.
fn read_ints_opt(
    bytes: &[u8],
    source: &ArraySource,
) -> Result<Result<ArrayD<i128>, String>, ReadFailure> {
    let mut dtype: Option<String> = None;
    macro_rules! try_int {
        ($($t:ty),*) => {$(
            match attempt::<$t>(bytes, source)? {
                Ok(a) => return Ok(Ok(a.mapv(i128::from))),
                Err(d) => {
                    dtype.get_or_insert(d);
                }
            }
        )*};
    }
    try_int!(i64, i32, i16, i8, u64, u32, u16, u8);
    Ok(Err(dtype.unwrap_or_default()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::{array, Array2};
    use ndarray_npy::{NpzWriter, WriteNpyExt};
    use std::io::Write as _;

    #[test]
    fn every_float_and_integer_width_reads_as_its_exact_value() {
        let dir = tempfile::tempdir().unwrap();
        let p = |name: &str| dir.path().join(name);
        array![[0.5f32, -0.25], [1.0, 0.3]]
            .write_npy(File::create(p("f32.npy")).unwrap())
            .unwrap();
        array![1i32, -2, 3]
            .write_npy(File::create(p("i32.npy")).unwrap())
            .unwrap();
        array![7u8, 9]
            .write_npy(File::create(p("u8.npy")).unwrap())
            .unwrap();
        let f = read_floats(&ArraySource::Npy(p("f32.npy"))).unwrap();
        assert!(f.float32);
        assert_eq!(f.data[[1, 1]], f64::from(0.3f32));
        assert_eq!(f.data.shape(), &[2, 2]);
        let i = read_floats(&ArraySource::Npy(p("i32.npy"))).unwrap();
        assert_eq!(i.data.as_slice().unwrap(), &[1.0, -2.0, 3.0]);
        let u = read_ints(&ArraySource::Npy(p("u8.npy"))).unwrap();
        assert_eq!(u.as_slice().unwrap(), &[7, 9]);
        // Floats are not integers.
        let e = read_ints(&ArraySource::Npy(p("f32.npy"))).unwrap_err();
        assert!(e.contains("not integer") && e.contains("<f4"), "{e}");
    }

    #[test]
    fn npz_members_are_found_by_name_and_a_missing_one_is_named() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("data.npz");
        let mut npz = NpzWriter::new_compressed(File::create(&path).unwrap());
        npz.add_array("Z_0", &Array2::<f64>::zeros((2, 3))).unwrap();
        npz.finish().unwrap();
        let ok = read_floats(&ArraySource::Npz {
            file: path.clone(),
            array: "Z_0".into(),
        })
        .unwrap();
        assert_eq!(ok.data.shape(), &[2, 3]);
        let e = read_floats(&ArraySource::Npz {
            file: path,
            array: "Z_1".into(),
        })
        .unwrap_err();
        assert!(
            e.contains("holds no array 'Z_1'") && e.contains("Z_0"),
            "{e}"
        );
    }

    #[test]
    fn a_header_claiming_more_than_the_file_holds_is_refused_before_allocating() {
        // A valid header for 10^15 float64 values followed by 16 bytes: reading it by the
        // header's claim would allocate 8 PB.
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("huge.npy");
        let mut bytes = Vec::new();
        ndarray::Array1::<f64>::zeros(2)
            .write_npy(&mut bytes)
            .unwrap();
        let at = bytes.windows(4).position(|w| w == b"(2,)").unwrap();
        let mut forged = bytes[..at].to_vec();
        forged.extend_from_slice(b"(1000000000000000,)");
        // Keep the header length: drop as many padding spaces as were added.
        let header_end = bytes.iter().position(|&b| b == b'\n').unwrap();
        let tail = &bytes[at + 4..header_end];
        forged.extend_from_slice(&tail[..tail.len() - 15]);
        forged.extend_from_slice(&bytes[header_end..]);
        File::create(&path).unwrap().write_all(&forged).unwrap();
        let e = read_floats(&ArraySource::Npy(path)).unwrap_err();
        assert!(e.contains("cut short or damaged"), "{e}");
        let e = read_floats(&ArraySource::Npy(PathBuf::from("/dev/zero"))).unwrap_err();
        assert!(e.contains("not a regular file"), "{e}");
    }
}
