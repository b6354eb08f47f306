//! Writer for run files (HDF5, layout `quassay-run` v1, docs/run-format.md).
//!
//! [`write_run`] writes a complete file at the path it is given; making that atomic is the
//! caller's job ([`crate::outputs::atomic::write_file`] hands it a temporary path). Strings are
//! stored as variable-length UTF-8 scalars and integers as 64-bit signed, as h5py does for
//! Python `str` and `int`, so files from quassay and from a lab's own h5py script look alike.
//!
//! Precision: `times`, spectra, norms and term data are always float64. [`FloatWidth::F32`]
//! stores `values`, `stderr` and `ideal` as float32, which rounds each to 24 significant bits
//! (relative error ≤ 2^-24); the reader allows for exactly that rounding in its range checks.

use std::path::Path;
use std::str::FromStr;

use hdf5::types::VarLenUnicode;
use hdf5::{Group, Location};
use ndarray::{Array1, Array2, ArrayView1, ArrayView2};

use crate::error::{Error, Result};
use crate::model::{Observable, Run, Shots};

/// Which float type `values`, `stderr` and `ideal` are stored as.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FloatWidth {
    /// float32 (IEEE binary32): half the size, 24 significant bits.
    F32,
    /// float64 (IEEE binary64): exact for every `f64` of the model.
    #[default]
    F64,
}

/// How the datasets are laid out on disk.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Compression {
    /// Contiguous, uncompressed.
    #[default]
    None,
    /// Chunked and deflate-compressed at `level` (0–9), with the byte-shuffle filter first if
    /// `shuffle` (the usual pairing for floating-point data).
    Gzip { level: u8, shuffle: bool },
}

/// Options of [`write_run`]; the default is float64, contiguous, uncompressed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct WriteOptions {
    /// Float type of `values`, `stderr` and `ideal`.
    pub values: FloatWidth,
    /// Dataset layout and compression.
    pub compression: Compression,
    /// Store every `support` as a one-dimensional dataset (the form that always works) rather
    /// than as an attribute. Supports longer than [`SUPPORT_ATTRIBUTE_MAX`] are always stored as
    /// datasets: HDF5's default (compact) attributes hold at most 64 KiB.
    pub support_dataset: bool,
}

/// The longest support written as an attribute (32 KiB of int64, half of HDF5's 64 KiB limit
/// for an attribute stored in the object header, which is what its defaults give).
pub const SUPPORT_ATTRIBUTE_MAX: usize = 4096;

/// Writes `run` as a complete layout-v1 file at `path` (created or truncated).
///
/// The caller makes the write atomic (see [`crate::outputs::atomic::write_file`]). Fails with
/// [`Error::Write`] naming `path` and the item that could not be written.
pub fn write_run(path: &Path, run: &Run, options: &WriteOptions) -> Result<()> {
    hdf5::silence_errors(true);
    let fail = |item: &str, e: hdf5::Error| Error::Write {
        path: path.to_path_buf(),
        message: format!("cannot write {item}: {e}"),
    };
    // Without HDF5's file lock: the file is a fresh temporary one that only this call writes,
    // and a lock would be inherited by any process spawned meanwhile (HDF5 does not mark its
    // descriptors close-on-exec), making the next open of the file fail.
    let file = hdf5::File::with_options()
        .with_fapl(|p| p.file_locking(false))
        .create(path)
        .map_err(|e| fail("the file", e))?;
    let w = Writer {
        options: *options,
        path,
    };
    w.root(&file, run)?;
    drop(file);
    Ok(())
}

struct Writer<'a> {
    options: WriteOptions,
    path: &'a Path,
}

impl Writer<'_> {
    fn err(&self, item: &str, e: impl std::fmt::Display) -> Error {
        Error::Write {
            path: self.path.to_path_buf(),
            message: format!("cannot write {item}: {e}"),
        }
    }

    fn root(&self, file: &hdf5::File, run: &Run) -> Result<()> {
        self.str_attr(file, "/", "format", "quassay-run")?;
        self.int_attr(file, "/", "format_version", 1)?;
        self.str_attr(file, "/", "run_id", &run.run_id)?;
        self.str_attr(file, "/", "time_unit", run.time_unit.as_str())?;
        self.int_attr(file, "/", "n_sites", run.n_sites() as i64)?;
        if let Some(d) = &run.description {
            self.str_attr(file, "/", "description", d)?;
        }
        self.f64_1d(file, "/times", ArrayView1::from(&run.times[..]), true)?;

        let lat = self.group(file, "lattice")?;
        let l = &run.lattice;
        self.str_attr(&lat, "/lattice", "geometry", l.geometry().as_str())?;
        if !l.shape().is_empty() {
            let shape: Vec<i64> = l.shape().iter().map(|&x| x as i64).collect();
            self.int_vec_attr(&lat, "/lattice", "shape", &shape)?;
        }
        self.str_attr(&lat, "/lattice", "boundary", l.boundary().as_str())?;
        let bonds = Array2::from_shape_fn((l.n_bonds(), 2), |(b, j)| l.bonds()[b][j] as i64);
        self.i64_2d(&lat, "/lattice/bonds", bonds.view())?;

        let ham = self.group(file, "hamiltonian")?;
        let h = &run.hamiltonian;
        self.str_attr(&ham, "/hamiltonian", "energy_unit", h.energy_unit.as_str())?;
        self.f64_attr(&ham, "/hamiltonian", "bond_norm_max", h.bond_norm_max)?;
        self.int_attr(
            &ham,
            "/hamiltonian",
            "interaction_range",
            i64::from(h.interaction_range),
        )?;
        if let Some(norms) = &h.bond_norms {
            self.f64_1d(
                &ham,
                "/hamiltonian/bond_norms",
                ArrayView1::from(&norms[..]),
                true,
            )?;
        }

        let obs = self.group(file, "observables")?;
        for o in &run.observables {
            self.observable(&obs, o)?;
        }
        Ok(())
    }

    fn observable(&self, parent: &Group, o: &Observable) -> Result<()> {
        let at = format!("/observables/{}", o.name);
        let g = parent.create_group(&o.name).map_err(|e| self.err(&at, e))?;
        self.float_2d(&g, &format!("{at}/values"), o.values.view())?;
        match &o.shots {
            Shots::Uniform(s) => self.int_attr(&g, &at, "shots", *s as i64)?,
            Shots::PerPoint(a) => {
                let a = a.mapv(|s| s as i64);
                self.i64_2d(&g, &format!("{at}/shots"), a.view())?;
            }
        }
        if let Some(se) = &o.stderr {
            self.float_2d(&g, &format!("{at}/stderr"), se.view())?;
        }
        if let Some(ideal) = &o.ideal {
            let full = self.options.values == FloatWidth::F64;
            self.f64_1d(
                &g,
                &format!("{at}/ideal"),
                ArrayView1::from(&ideal[..]),
                full,
            )?;
        }
        if !o.support.is_empty() {
            let s: Vec<i64> = o.support.iter().map(|&x| x as i64).collect();
            if self.options.support_dataset || s.len() > SUPPORT_ATTRIBUTE_MAX {
                g.new_dataset_builder()
                    .with_data(&Array1::from(s))
                    .create("support")
                    .map_err(|e| self.err(&format!("{at}/support"), e))?;
            } else {
                self.int_vec_attr(&g, &at, "support", &s)?;
            }
        }
        self.f64_attr(&g, &at, "spectrum_min", o.spectrum_min)?;
        self.f64_attr(&g, &at, "spectrum_max", o.spectrum_max)?;
        // Written only when declared, so that files without it keep their bytes.
        if o.two_outcomes {
            self.int_attr(&g, &at, "two_outcomes", 1)?;
        }
        if let Some(d) = &o.description {
            self.str_attr(&g, &at, "description", d)?;
        }
        if let Some(t) = &o.terms {
            let m = t.supports.iter().map(Vec::len).max().unwrap_or(0);
            let sup = Array2::from_shape_fn((t.supports.len(), m), |(a, j)| {
                t.supports[a].get(j).map_or(-1, |&s| s as i64)
            });
            self.i64_2d(&g, &format!("{at}/terms_support"), sup.view())?;
            self.f64_1d(
                &g,
                &format!("{at}/terms_weight"),
                ArrayView1::from(&t.weights[..]),
                true,
            )?;
            let spec = Array2::from_shape_fn((t.spectra.len(), 2), |(a, j)| t.spectra[a][j]);
            self.f64_2d(&g, &format!("{at}/terms_spectrum"), spec.view())?;
        }
        Ok(())
    }

    fn group(&self, parent: &Group, name: &str) -> Result<Group> {
        parent
            .create_group(name)
            .map_err(|e| self.err(&format!("/{name}"), e))
    }

    fn str_attr(&self, loc: &Location, at: &str, name: &str, value: &str) -> Result<()> {
        let item = attr_item(at, name);
        let v = VarLenUnicode::from_str(value).map_err(|e| self.err(&item, e))?;
        loc.new_attr::<VarLenUnicode>()
            .shape(())
            .create(name)
            .and_then(|a| a.as_writer().write_scalar(&v))
            .map_err(|e| self.err(&item, e))
    }

    fn int_attr(&self, loc: &Location, at: &str, name: &str, value: i64) -> Result<()> {
        loc.new_attr::<i64>()
            .shape(())
            .create(name)
            .and_then(|a| a.as_writer().write_scalar(&value))
            .map_err(|e| self.err(&attr_item(at, name), e))
    }

    fn f64_attr(&self, loc: &Location, at: &str, name: &str, value: f64) -> Result<()> {
        loc.new_attr::<f64>()
            .shape(())
            .create(name)
            .and_then(|a| a.as_writer().write_scalar(&value))
            .map_err(|e| self.err(&attr_item(at, name), e))
    }

    fn int_vec_attr(&self, loc: &Location, at: &str, name: &str, value: &[i64]) -> Result<()> {
        loc.new_attr_builder()
            .with_data(&Array1::from(value.to_vec()))
            .create(name)
            .map(|_| ())
            .map_err(|e| self.err(&attr_item(at, name), e))
    }

    /// A dataset name is the last component of its full path `at`.
    fn leaf(at: &str) -> &str {
        at.rsplit('/').next().unwrap_or(at)
    }

    fn f64_1d(&self, g: &Group, at: &str, data: ArrayView1<f64>, full: bool) -> Result<()> {
        let n = data.len();
        let b = g.new_dataset_builder();
        let r = if full {
            self.layout(b.with_data(data), &[n]).create(Self::leaf(at))
        } else {
            let d32 = data.mapv(|x| x as f32);
            self.layout(b.with_data(&d32), &[n]).create(Self::leaf(at))
        };
        r.map(|_| ()).map_err(|e| self.err(at, e))
    }

    fn f64_2d(&self, g: &Group, at: &str, data: ArrayView2<f64>) -> Result<()> {
        let (r, c) = data.dim();
        self.layout(g.new_dataset_builder().with_data(data), &[r, c])
            .create(Self::leaf(at))
            .map(|_| ())
            .map_err(|e| self.err(at, e))
    }

    fn float_2d(&self, g: &Group, at: &str, data: ArrayView2<f64>) -> Result<()> {
        match self.options.values {
            FloatWidth::F64 => self.f64_2d(g, at, data),
            FloatWidth::F32 => {
                let (r, c) = data.dim();
                let d32 = data.mapv(|x| x as f32);
                self.layout(g.new_dataset_builder().with_data(&d32), &[r, c])
                    .create(Self::leaf(at))
                    .map(|_| ())
                    .map_err(|e| self.err(at, e))
            }
        }
    }

    fn i64_2d(&self, g: &Group, at: &str, data: ArrayView2<i64>) -> Result<()> {
        let (r, c) = data.dim();
        self.layout(g.new_dataset_builder().with_data(data), &[r, c])
            .create(Self::leaf(at))
            .map(|_| ())
            .map_err(|e| self.err(at, e))
    }

    /// Applies the chosen compression; empty datasets stay contiguous (HDF5 needs chunks of
    /// at least one element).
    fn layout<'d, T: hdf5::H5Type, D: ndarray::Dimension>(
        &self,
        b: hdf5::DatasetBuilderData<'d, T, D>,
        shape: &[usize],
    ) -> hdf5::DatasetBuilderData<'d, T, D> {
        match self.options.compression {
            Compression::Gzip { level, shuffle } if shape.iter().all(|&n| n > 0) => {
                let chunk = chunk_shape(shape, std::mem::size_of::<T>());
                let b = b.chunk(chunk);
                let b = if shuffle { b.shuffle() } else { b };
                b.deflate(level.min(9))
            }
            _ => b,
        }
    }
}

fn attr_item(at: &str, name: &str) -> String {
    format!("attribute `{name}` of {at}")
}

/// A chunk shape of at most about 64 KiB: whole rows of the last axis where they fit, then as
/// many leading rows as fit.
fn chunk_shape(shape: &[usize], elem: usize) -> Vec<usize> {
    const TARGET: usize = 64 * 1024;
    let elem = elem.max(1);
    let last = *shape.last().unwrap_or(&1);
    let cols = last.min((TARGET / elem).max(1));
    let mut chunk = vec![1usize; shape.len()];
    if let Some(c) = chunk.last_mut() {
        *c = cols;
    }
    if shape.len() == 2 {
        chunk[0] = shape[0].min((TARGET / (elem * cols)).max(1));
    }
    chunk
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::inputs::run_file::read_run;
    use crate::model::{Boundary, FrequencyUnit, Geometry, Hamiltonian, Lattice, Terms, TimeUnit};
    use ndarray::array;

    /// An invented two-by-three square-lattice run with every optional item present.
    fn sample_run() -> Run {
        let lattice = Lattice::regular(Geometry::Square, &[2, 3], Boundary::Open).unwrap();
        let n_bonds = lattice.n_bonds();
        let z = Observable {
            name: "Z_1".into(),
            values: array![[0.5, -0.25, 1.0], [0.0, 0.125, -1.0]],
            shots: Shots::PerPoint(array![[100, 100, 90], [100, 80, 100]]),
            stderr: Some(array![[0.0625, 0.125, 0.0], [0.125, 0.125, 0.0]]),
            ideal: Some(vec![0.5, 0.0, 1.0]),
            support: vec![1],
            spectrum_min: -1.0,
            spectrum_max: 1.0,
            description: Some("Pauli Z on site 1".into()),
            terms: None,
            two_outcomes: false,
        };
        let m = Observable {
            name: "M".into(),
            values: array![[0.5, 0.25, 0.0], [0.75, 0.5, 0.25]],
            shots: Shots::Uniform(500),
            stderr: None,
            ideal: None,
            support: vec![],
            spectrum_min: -1.0,
            spectrum_max: 1.0,
            description: None,
            terms: Some(Terms {
                supports: vec![vec![0], vec![1, 2], vec![3, 4, 5]],
                weights: vec![0.5, 0.25, 0.25],
                spectra: vec![[-1.0, 1.0]; 3],
            }),
            two_outcomes: false,
        };
        Run {
            run_id: "invented-0001".into(),
            time_unit: TimeUnit::Us,
            description: Some("invented test scenario".into()),
            times: vec![0.0, 0.5, 1.0],
            lattice,
            hamiltonian: Hamiltonian {
                energy_unit: FrequencyUnit::MHz,
                bond_norm_max: 1.5,
                bond_norms: Some(vec![1.5; n_bonds]),
                interaction_range: 1,
            },
            observables: vec![m, z],
        }
    }

    #[test]
    fn a_written_run_reads_back_equal_in_both_layouts() {
        let dir = tempfile::tempdir().unwrap();
        let run = sample_run();
        // Every value of the sample is a dyadic rational, exact in float32 too.
        for options in [
            WriteOptions::default(),
            WriteOptions {
                values: FloatWidth::F32,
                compression: Compression::Gzip {
                    level: 6,
                    shuffle: true,
                },
                support_dataset: true,
            },
        ] {
            let path = dir.path().join(format!("{options:?}.h5"));
            write_run(&path, &run, &options).unwrap();
            assert_eq!(read_run(&path).unwrap(), run, "{options:?}");
        }
    }

    #[test]
    fn a_support_too_large_for_an_attribute_is_written_as_a_dataset() {
        // 10^4 sites: 80 kB of int64, over HDF5's 64 KiB limit for a compact attribute (the
        // "object header message is too large" error h5py's defaults give).
        let dir = tempfile::tempdir().unwrap();
        let mut run = sample_run();
        let n = 10_000;
        run.lattice = Lattice::regular(Geometry::Chain, &[n], Boundary::Open).unwrap();
        run.hamiltonian.bond_norms = None;
        for o in &mut run.observables {
            o.support = (0..n).collect();
            o.terms = None;
        }
        let path = dir.path().join("large.h5");
        write_run(&path, &run, &WriteOptions::default()).unwrap();
        {
            let file = hdf5::File::open(&path).unwrap();
            let g = file.group("observables/M").unwrap();
            assert!(g.link_exists("support"), "support stored as a dataset");
        }
        assert_eq!(read_run(&path).unwrap(), run);
    }

    #[test]
    fn a_graph_without_bonds_and_a_single_time_round_trips_compressed() {
        let dir = tempfile::tempdir().unwrap();
        let mut run = sample_run();
        run.lattice = Lattice::graph(6, &[], Boundary::Open).unwrap();
        run.hamiltonian.bond_norms = Some(vec![]);
        run.times = vec![0.25];
        for o in &mut run.observables {
            o.values = o.values.slice(ndarray::s![.., 0..1]).to_owned();
            o.stderr = o
                .stderr
                .as_ref()
                .map(|e| e.slice(ndarray::s![.., 0..1]).to_owned());
            o.ideal = o.ideal.as_ref().map(|i| i[..1].to_vec());
            if let Shots::PerPoint(a) = &o.shots {
                o.shots = Shots::PerPoint(a.slice(ndarray::s![.., 0..1]).to_owned());
            }
        }
        let path = dir.path().join("graph.h5");
        let options = WriteOptions {
            values: FloatWidth::F64,
            compression: Compression::Gzip {
                level: 9,
                shuffle: false,
            },
            support_dataset: false,
        };
        write_run(&path, &run, &options).unwrap();
        assert_eq!(read_run(&path).unwrap(), run);
    }

    #[test]
    fn chunks_stay_near_64_kib_and_inside_the_shape() {
        assert_eq!(chunk_shape(&[10, 20], 8), vec![10, 20]);
        assert_eq!(chunk_shape(&[100_000], 8), vec![8192]);
        let c = chunk_shape(&[1000, 1000], 8);
        assert_eq!(c, vec![8, 1000]);
        assert!(c[0] * c[1] * 8 <= 64 * 1024);
    }
}
