//! A lab's own arrays in: a description (JSON, format `quassay-arrays` v1, docs/assemble.md)
//! naming NumPy arrays (`.npy` files, `.npz` members) or giving small ones inline, read and
//! checked into a [`Run`] that `quassay assemble` writes as a run file.
//!
//! Why its own reader: a run file's checks name HDF5 paths, which a lab that never wrote the
//! file cannot act on. Here every problem names the description's JSON pointer and the array
//! (file and member) it is about, with the fix, and all problems are reported in one pass. The
//! checks are those of the run-file reader (`inputs::run_file::checks`), applied to the arrays
//! before anything is written; `assemble` then reads the written file back with `inspect`'s
//! reader as a last gate.

pub mod npy;

use std::path::{Path, PathBuf};

use ndarray::{Array2, ArrayD, Ix1, Ix2};
use serde_json::{Map, Value};

use crate::error::{Error, InputKind, Problem};
use crate::inputs::json_reader::{escape, fix_root, syntax_problem, Reader};
use crate::inputs::run_file::checks;
use crate::model::{
    Boundary, FrequencyUnit, Geometry, Hamiltonian, Lattice, Observable, Run, Shots, Terms,
    TimeUnit,
};
use npy::{read_floats, read_ints, ArraySource, FloatArray};

/// The format name of an array description.
pub const FORMAT: &str = "quassay-arrays";

const ROOT_KEYS: &[&str] = &[
    "$schema",
    "format",
    "format_version",
    "run_id",
    "description",
    "time_unit",
    "times",
    "lattice",
    "hamiltonian",
    "observables",
];
const LATTICE_KEYS: &[&str] = &["geometry", "shape", "boundary", "n_sites", "bonds"];
const HAMILTONIAN_KEYS: &[&str] = &[
    "energy_unit",
    "bond_norm_max",
    "bond_norms",
    "interaction_range",
];
const OBSERVABLE_KEYS: &[&str] = &[
    "values",
    "shots",
    "stderr",
    "ideal",
    "support",
    "spectrum",
    "two_outcomes",
    "description",
    "terms",
];
const TERMS_KEYS: &[&str] = &["support", "weight", "spectrum"];

/// A checked description with its arrays, ready to be written.
#[derive(Debug, Clone)]
pub struct Assembled {
    /// The run, every array checked.
    pub run: Run,
    /// Whether every `values`, `stderr` and `ideal` array was stored as float32 (then the run
    /// file stores them as float32 too, exactly; otherwise as float64).
    pub all_float32: bool,
    /// The array files read, in reading order, without repeats.
    pub files: Vec<PathBuf>,
}

/// Reads the description at `path` and the arrays it names (relative to its folder).
pub fn read_description(path: &Path) -> crate::Result<Assembled> {
    let bytes = crate::inputs::regular::read_regular(
        path,
        "an array description (JSON, format quassay-arrays v1)",
    )?;
    let fail = |problems| Error::Input {
        kind: InputKind::Arrays,
        file: path.to_path_buf(),
        problems,
    };
    let value: Value =
        serde_json::from_slice(&bytes).map_err(|e| fail(vec![syntax_problem(&e)]))?;
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    assemble_from_value(&value, &dir).map_err(fail)
}

/// Checks a parsed description; arrays named by file are read relative to `dir`.
pub fn assemble_from_value(value: &Value, dir: &Path) -> Result<Assembled, Vec<Problem>> {
    let mut a = Assembler {
        rd: Reader {
            problems: Vec::new(),
        },
        dir: dir.to_path_buf(),
        files: Vec::new(),
        all_float32: true,
    };
    let run = a.root(value);
    match run {
        Some(run) if a.rd.problems.is_empty() => Ok(Assembled {
            run,
            all_float32: a.all_float32,
            files: a.files,
        }),
        _ => Err(fix_root(a.rd.problems)),
    }
}

struct Assembler {
    rd: Reader,
    dir: PathBuf,
    files: Vec<PathBuf>,
    all_float32: bool,
}

/// How a float array was stored: the relative rounding of its type (0 for float64, integers
/// and inline numbers; 2^-24 for float32) and whether it was float32.
#[derive(Debug, Clone, Copy)]
struct Stored {
    rounding: f64,
    float32: bool,
}

/// An array with the words that name it in messages.
struct Named<T> {
    data: ArrayD<T>,
    what: String,
}

impl Assembler {
    fn root(&mut self, v: &Value) -> Option<Run> {
        let obj = self.rd.object(v, "", ROOT_KEYS)?;
        match obj.get("format").and_then(Value::as_str) {
            Some(FORMAT) => {}
            _ => self.rd.push(
                "/format",
                format!("must be \"{FORMAT}\" (this file is read as an array description)"),
            ),
        }
        match obj.get("format_version").and_then(Value::as_u64) {
            Some(1) => {}
            _ => self.rd.push(
                "/format_version",
                "must be 1, the only version of the array description",
            ),
        }
        let run_id = self.text(obj, "", "run_id", true);
        let description = self.text(obj, "", "description", false);
        let time_unit = match obj.get("time_unit") {
            None => {
                self.rd.push("/time_unit", "is missing; give the unit of `times`: \"s\", \"ms\", \"us\" or \"ns\" (never assumed)");
                None
            }
            Some(u) => {
                let t = u.as_str().and_then(TimeUnit::parse);
                if t.is_none() {
                    self.rd.push(
                        "/time_unit",
                        "must be \"s\", \"ms\", \"us\" or \"ns\" (case-sensitive)",
                    );
                }
                t
            }
        };
        let times = self.times(obj);
        let lattice = self.lattice(obj);
        let hamiltonian = lattice
            .as_ref()
            .and_then(|l| self.hamiltonian(obj, l.n_bonds()));
        let n_sites = lattice.as_ref().map(Lattice::n_sites);
        let observables = self.observables(obj, times.as_ref().map(Vec::len), n_sites);
        Some(Run {
            run_id: run_id?.unwrap_or_default(),
            time_unit: time_unit?,
            description: description?,
            times: times?,
            lattice: lattice?,
            hamiltonian: hamiltonian?,
            observables: observables?,
        })
    }

    /// A string member: `Some(None)` when absent and not required, `None` after a problem.
    fn text(
        &mut self,
        obj: &Map<String, Value>,
        at: &str,
        key: &str,
        required: bool,
    ) -> Option<Option<String>> {
        let path = format!("{at}/{key}");
        match obj.get(key) {
            None if required => {
                self.rd.push(path, "is missing; it is required");
                None
            }
            None => Some(None),
            Some(v) => match v.as_str() {
                Some(s) if required && s.is_empty() => {
                    self.rd.push(path, "is empty; give a non-empty string");
                    None
                }
                Some(s) => Some(Some(s.to_string())),
                None => {
                    self.rd.push(path, "must be a string");
                    None
                }
            },
        }
    }

    /// Where an array comes from: a string names a `.npy` file, `{"file", "array"}` a member
    /// of a `.npz` archive; `None` (with no problem) for an inline JSON array.
    fn source(&mut self, v: &Value, path: &str) -> Option<Option<ArraySource>> {
        match v {
            Value::String(s) => {
                let p = self.dir.join(s);
                self.note_file(&p);
                Some(Some(ArraySource::Npy(p)))
            }
            Value::Object(_) => {
                let o = self.rd.object(v, path, &["file", "array"])?;
                let file = self.rd.required(o, path, "file")?;
                let file = self.rd.string(file, &format!("{path}/file"))?;
                let array = self.rd.required(o, path, "array")?;
                let array = self.rd.string(array, &format!("{path}/array"))?;
                let p = self.dir.join(file);
                self.note_file(&p);
                Some(Some(ArraySource::Npz {
                    file: p,
                    array: array.to_string(),
                }))
            }
            Value::Array(_) => Some(None),
            _ => {
                self.rd.push(path, "must name a .npy file (a string), a member of a .npz archive ({\"file\": ..., \"array\": ...}), or be an inline JSON array");
                None
            }
        }
    }

    fn note_file(&mut self, p: &Path) {
        if !self.files.iter().any(|f| f == p) {
            self.files.push(p.to_path_buf());
        }
    }

    /// A float array, from a file or inline.
    fn floats(&mut self, v: &Value, path: &str) -> Option<(Named<f64>, Stored)> {
        match self.source(v, path)? {
            Some(src) => match read_floats(&src) {
                Ok(FloatArray {
                    data,
                    rounding,
                    float32,
                }) => Some((
                    Named {
                        data,
                        what: src.describe(),
                    },
                    Stored { rounding, float32 },
                )),
                Err(m) => {
                    self.rd.push(path, m);
                    None
                }
            },
            None => Some((
                Named {
                    data: inline(v, path, &mut self.rd, |x| x.as_f64())?,
                    what: "the inline array".into(),
                },
                Stored {
                    rounding: 0.0,
                    float32: false,
                },
            )),
        }
    }

    /// An integer array, from a file or inline.
    fn ints(&mut self, v: &Value, path: &str) -> Option<Named<i128>> {
        match self.source(v, path)? {
            Some(src) => match read_ints(&src) {
                Ok(data) => Some(Named {
                    data,
                    what: src.describe(),
                }),
                Err(m) => {
                    self.rd.push(path, m);
                    None
                }
            },
            None => Some(Named {
                data: inline(v, path, &mut self.rd, |x| x.as_i64().map(i128::from))?,
                what: "the inline array".into(),
            }),
        }
    }

    fn vector(&mut self, a: Named<f64>, path: &str, len: Option<usize>) -> Option<Vec<f64>> {
        let shape = a.data.shape().to_vec();
        let ok = shape.len() == 1 && len.is_none_or(|n| shape[0] == n);
        if !ok {
            let want = len.map_or("a vector".to_string(), |n| format!("a vector of {n}"));
            self.rd.push(
                path,
                format!("{} has shape {shape:?}; store {want}", a.what),
            );
            return None;
        }
        a.data.into_dimensionality::<Ix1>().ok().map(|x| x.to_vec())
    }

    fn times(&mut self, obj: &Map<String, Value>) -> Option<Vec<f64>> {
        let v = self.rd.required(obj, "", "times")?;
        let (a, _) = self.floats(v, "/times")?;
        let what = a.what.clone();
        let t = self.vector(a, "/times", None)?;
        let problems = checks::check_times(&t);
        for m in &problems {
            self.rd.push("/times", format!("{what}: {m}"));
        }
        problems.is_empty().then_some(t)
    }

    fn lattice(&mut self, obj: &Map<String, Value>) -> Option<Lattice> {
        let v = self.rd.required(obj, "", "lattice")?;
        let o = self.rd.object(v, "/lattice", LATTICE_KEYS)?;
        let geometry = self.rd.required(o, "/lattice", "geometry")?;
        let geometry = match geometry.as_str().and_then(Geometry::parse) {
            Some(g) => g,
            None => {
                self.rd.push(
                    "/lattice/geometry",
                    "must be \"chain\", \"square\", \"cubic\" or \"graph\"",
                );
                return None;
            }
        };
        let boundary = match o.get("boundary") {
            None => Boundary::Open,
            Some(b) => match b.as_str().and_then(Boundary::parse) {
                Some(b) => b,
                None => {
                    self.rd
                        .push("/lattice/boundary", "must be \"open\" or \"periodic\"");
                    return None;
                }
            },
        };
        let made = if geometry == Geometry::Graph {
            let n = self.rd.required(o, "/lattice", "n_sites")?;
            let n = self
                .rd
                .integer(n, "/lattice/n_sites", 1, u64::from(u32::MAX) - 2)?;
            let bonds = match o.get("bonds") {
                Some(b) => self.bonds(b)?,
                None => {
                    self.rd.push(
                        "/lattice/bonds",
                        "is missing; a graph lists its bonds as site pairs, e.g. [[0, 1], [1, 2]]",
                    );
                    return None;
                }
            };
            Lattice::graph(n as usize, &bonds, boundary)
        } else {
            let shape = self.rd.required(o, "/lattice", "shape")?;
            let Some(shape) = shape.as_array().and_then(|a| {
                a.iter()
                    .map(|x| x.as_u64().map(|n| n as usize))
                    .collect::<Option<Vec<_>>>()
            }) else {
                self.rd.push(
                    "/lattice/shape",
                    "must be a list of positive integers: [n], [Lx, Ly] or [Lx, Ly, Lz]",
                );
                return None;
            };
            if o.contains_key("bonds") {
                self.rd.push(
                    "/lattice/bonds",
                    "is given for a regular lattice, whose bonds follow from its shape; remove it (or use geometry \"graph\")",
                );
                return None;
            }
            Lattice::regular(geometry, &shape, boundary)
        };
        match made {
            Ok(l) => Some(l),
            Err(e) => {
                self.rd.push("/lattice", format!("{e}"));
                None
            }
        }
    }

    fn bonds(&mut self, v: &Value) -> Option<Vec<[usize; 2]>> {
        let path = "/lattice/bonds";
        let a = self.ints(v, path)?;
        let shape = a.data.shape().to_vec();
        let pairs = shape.len() == 2 && shape[1] == 2;
        let empty = shape.len() == 1 && shape[0] == 0;
        if !pairs && !empty {
            self.rd.push(
                path,
                format!(
                    "{} has shape {shape:?}; store the bonds as B × 2 site pairs",
                    a.what
                ),
            );
            return None;
        }
        let flat: Vec<i128> = a.data.iter().copied().collect();
        if let Some(s) = flat.iter().find(|&&s| s < 0 || s > u32::MAX as i128) {
            self.rd.push(
                path,
                format!(
                    "{} holds the site {s}; sites are 0-based and non-negative",
                    a.what
                ),
            );
            return None;
        }
        Some(
            flat.chunks_exact(2)
                .map(|p| [p[0] as usize, p[1] as usize])
                .collect(),
        )
    }

    fn hamiltonian(&mut self, obj: &Map<String, Value>, n_bonds: usize) -> Option<Hamiltonian> {
        let at = "/hamiltonian";
        let v = self.rd.required(obj, "", "hamiltonian")?;
        let o = self.rd.object(v, at, HAMILTONIAN_KEYS)?;
        let unit = self.rd.required(o, at, "energy_unit")?;
        let energy_unit = unit.as_str().and_then(FrequencyUnit::parse);
        if energy_unit.is_none() {
            self.rd.push(
                "/hamiltonian/energy_unit",
                format!("must be one of {}", FrequencyUnit::accepted()),
            );
        }
        let max = self.rd.required(o, at, "bond_norm_max")?;
        let bond_norm_max = self.rd.number(max, "/hamiltonian/bond_norm_max");
        let bond_norm_max = match bond_norm_max {
            Some(x) if x < 0.0 => {
                self.rd
                    .push("/hamiltonian/bond_norm_max", "must be ≥ 0 (a norm)");
                None
            }
            x => x,
        };
        let bond_norms = match o.get("bond_norms") {
            None => Some(None),
            Some(b) => {
                let path = "/hamiltonian/bond_norms";
                let (a, _) = self.floats(b, path)?;
                let what = a.what.clone();
                let norms = self.vector(a, path, Some(n_bonds))?;
                let max = bond_norm_max.unwrap_or(f64::INFINITY);
                if let Some(k) = norms
                    .iter()
                    .position(|&x| !x.is_finite() || x < 0.0 || x > max * (1.0 + 1e-12))
                {
                    self.rd.push(path, format!("{what}: the norm {} of bond {k} is not finite, negative or above bond_norm_max; correct it", norms[k]));
                    None
                } else {
                    Some(Some(norms))
                }
            }
        };
        let interaction_range = match o.get("interaction_range") {
            None => Some(1),
            Some(r) => self
                .rd
                .integer(r, "/hamiltonian/interaction_range", 1, u64::from(u32::MAX))
                .map(|r| r as u32),
        };
        Some(Hamiltonian {
            energy_unit: energy_unit?,
            bond_norm_max: bond_norm_max?,
            bond_norms: bond_norms?,
            interaction_range: interaction_range?,
        })
    }

    fn observables(
        &mut self,
        obj: &Map<String, Value>,
        n_times: Option<usize>,
        n_sites: Option<usize>,
    ) -> Option<Vec<Observable>> {
        let v = self.rd.required(obj, "", "observables")?;
        let Some(map) = v.as_object() else {
            self.rd.push(
                "/observables",
                "must be an object with one member per observable, keyed by its name",
            );
            return None;
        };
        if map.is_empty() {
            self.rd
                .push("/observables", "holds no observable; give at least one");
            return None;
        }
        // Bytewise order of the names, as the run-file reader has them.
        let mut names: Vec<&String> = map.keys().collect();
        names.sort();
        let mut out = Some(Vec::with_capacity(names.len()));
        let mut reference: Option<(String, usize)> = None;
        for name in names {
            let at = format!("/observables/{}", escape(name));
            let o = self.observable(&map[name], &at, name, n_times, n_sites);
            match (o, out.as_mut()) {
                (Some(o), Some(list)) => {
                    let r = o.values.nrows();
                    match &reference {
                        Some((first, r0)) if *r0 != r => {
                            self.rd.push(format!("{at}/values"), format!("has {r} realizations (rows) but observable {first} has {r0}; every observable has the same realizations"));
                            out = None;
                        }
                        Some(_) => list.push(o),
                        None => {
                            reference = Some((name.clone(), r));
                            list.push(o);
                        }
                    }
                }
                _ => out = None,
            }
        }
        out
    }

    fn observable(
        &mut self,
        v: &Value,
        at: &str,
        name: &str,
        n_times: Option<usize>,
        n_sites: Option<usize>,
    ) -> Option<Observable> {
        if !checks::valid_name(name) {
            self.rd.push(at, format!("the name \"{name}\" uses characters other than ASCII letters, digits, `_`, `-` and `.`; rename it"));
        }
        let o = self.rd.object(v, at, OBSERVABLE_KEYS)?;
        let spectrum = self.spectrum(o, at);
        let values = self.values(o, at, n_times, spectrum);
        let dims = values.as_ref().map(Array2::dim);
        let shots = self.shots(o, at, dims);
        let stderr = match o.get("stderr") {
            None => Some(None),
            Some(s) => self.stderr(s, &format!("{at}/stderr"), dims).map(Some),
        };
        let ideal = match o.get("ideal") {
            None => Some(None),
            Some(i) => self
                .ideal(i, &format!("{at}/ideal"), n_times, spectrum)
                .map(Some),
        };
        let support = match o.get("support") {
            None => Some(Vec::new()),
            Some(s) => self.support(s, &format!("{at}/support"), n_sites),
        };
        let two_outcomes = match o.get("two_outcomes") {
            None => Some(false),
            Some(Value::Bool(b)) => Some(*b),
            Some(_) => {
                self.rd
                    .push(format!("{at}/two_outcomes"), "must be true or false");
                None
            }
        };
        let description = self.text(o, at, "description", false);
        let terms = match o.get("terms") {
            None => Some(None),
            Some(t) => self
                .terms(
                    t,
                    &format!("{at}/terms"),
                    n_sites,
                    support.as_deref(),
                    spectrum,
                )
                .map(Some),
        };
        let (spectrum_min, spectrum_max) = spectrum?;
        Some(Observable {
            name: name.to_string(),
            values: values?,
            shots: shots?,
            stderr: stderr?,
            ideal: ideal?,
            support: support?,
            spectrum_min,
            spectrum_max,
            description: description?,
            terms: terms?,
            two_outcomes: two_outcomes?,
        })
    }

    fn spectrum(&mut self, o: &Map<String, Value>, at: &str) -> Option<(f64, f64)> {
        let path = format!("{at}/spectrum");
        let v = self.rd.required(o, at, "spectrum")?;
        match v
            .as_array()
            .map(|a| a.iter().map(Value::as_f64).collect::<Vec<_>>())
        {
            Some(x) if x.len() == 2 => match (x[0], x[1]) {
                (Some(lo), Some(hi)) if lo.is_finite() && hi.is_finite() && lo <= hi => {
                    Some((lo, hi))
                }
                _ => {
                    self.rd.push(path, "must be [min, max], two finite numbers with min ≤ max (the observable's eigenvalue range)");
                    None
                }
            },
            _ => {
                self.rd.push(
                    path,
                    "must be [min, max], the observable's eigenvalue range (e.g. [-1, 1] for a Pauli product)",
                );
                None
            }
        }
    }

    fn matrix(
        &mut self,
        a: Named<f64>,
        path: &str,
        dims: (Option<usize>, Option<usize>),
        what: &str,
    ) -> Option<Array2<f64>> {
        let shape = a.data.shape().to_vec();
        let fits = shape.len() == 2
            && dims.0.is_none_or(|r| shape[0] == r)
            && dims.1.is_none_or(|t| shape[1] == t);
        if !fits {
            let want = match dims {
                (Some(r), Some(t)) => format!("{r} × {t} (realizations × times)"),
                (None, Some(t)) => {
                    format!("R × {t} (one row per realization, one column per time)")
                }
                _ => "realizations × times".into(),
            };
            self.rd.push(
                path,
                format!("{} has shape {shape:?}; store {what} as {want}", a.what),
            );
            return None;
        }
        a.data.into_dimensionality::<Ix2>().ok()
    }

    fn values(
        &mut self,
        o: &Map<String, Value>,
        at: &str,
        n_times: Option<usize>,
        spectrum: Option<(f64, f64)>,
    ) -> Option<Array2<f64>> {
        let path = format!("{at}/values");
        let v = self.rd.required(o, at, "values")?;
        let (a, raw) = self.floats(v, &path)?;
        self.all_float32 &= raw.float32;
        let what = a.what.clone();
        let m = self.matrix(a, &path, (None, n_times), "the values")?;
        if m.nrows() == 0 {
            self.rd.push(
                &path,
                format!("{what} has no rows; store at least one realization"),
            );
            return None;
        }
        if let Some(((r, k), _)) = m.indexed_iter().find(|(_, x)| !x.is_finite()) {
            let n = m.iter().filter(|x| !x.is_finite()).count();
            self.rd.push(&path, format!("{what}: {n} value(s) are NaN or infinite (first at [realization, time] = [{r}, {k}]); store finite estimates, and leave out a realization that was not measured"));
            return None;
        }
        if let Some((lo, hi)) = spectrum {
            let tol = checks::range_tolerance(lo, hi, raw.rounding);
            let iter = m
                .indexed_iter()
                .map(|((r, k), x)| (format!("[realization, time] = [{r}, {k}]"), x));
            if let Some(msg) = checks::check_in_range(iter, lo, hi, tol, "value") {
                self.rd
                    .push(&path, format!("{what}: {}", spectrum_fix(&msg)));
                return None;
            }
        }
        Some(m)
    }

    fn shots(
        &mut self,
        o: &Map<String, Value>,
        at: &str,
        dims: Option<(usize, usize)>,
    ) -> Option<Shots> {
        let path = format!("{at}/shots");
        let v = self.rd.required(o, at, "shots")?;
        if v.is_number() {
            return match v.as_u64() {
                Some(n) if n >= 1 => Some(Shots::Uniform(n)),
                _ => {
                    self.rd.push(path, "must be an integer ≥ 1 (the shots behind every estimate), or name an R × T integer array");
                    None
                }
            };
        }
        let a = self.ints(v, &path)?;
        let what = a.what.clone();
        let shape = a.data.shape().to_vec();
        let fits = shape.len() == 2 && dims.is_none_or(|(r, t)| shape == [r, t]);
        if !fits {
            let want = dims.map_or("realizations × times".into(), |(r, t)| {
                format!("{r} × {t}, the shape of values")
            });
            self.rd.push(
                &path,
                format!("{what} has shape {shape:?}; store shots as {want}"),
            );
            return None;
        }
        if let Some(n) = a.data.iter().find(|&&n| n < 1 || n > i128::from(u64::MAX)) {
            self.rd.push(
                &path,
                format!("{what} holds the shot count {n}; every estimate rests on at least 1 shot"),
            );
            return None;
        }
        let m = a
            .data
            .mapv(|n| n as u64)
            .into_dimensionality::<Ix2>()
            .ok()?;
        Some(Shots::PerPoint(m))
    }

    fn stderr(
        &mut self,
        v: &Value,
        path: &str,
        dims: Option<(usize, usize)>,
    ) -> Option<Array2<f64>> {
        let (a, raw) = self.floats(v, path)?;
        self.all_float32 &= raw.float32;
        let what = a.what.clone();
        let m = self.matrix(
            a,
            path,
            (dims.map(|d| d.0), dims.map(|d| d.1)),
            "the standard errors",
        )?;
        if let Some(((r, k), x)) = m.indexed_iter().find(|(_, x)| !x.is_finite() || **x < 0.0) {
            self.rd.push(path, format!("{what} holds {x} at [realization, time] = [{r}, {k}]; standard errors are finite and ≥ 0"));
            return None;
        }
        Some(m)
    }

    fn ideal(
        &mut self,
        v: &Value,
        path: &str,
        n_times: Option<usize>,
        spectrum: Option<(f64, f64)>,
    ) -> Option<Vec<f64>> {
        let (a, raw) = self.floats(v, path)?;
        self.all_float32 &= raw.float32;
        let what = a.what.clone();
        let x = self.vector(a, path, n_times)?;
        if let Some(k) = x.iter().position(|v| !v.is_finite()) {
            self.rd.push(
                path,
                format!(
                    "{what}: the ideal value at index {k} is NaN or infinite; store finite values"
                ),
            );
            return None;
        }
        if let Some((lo, hi)) = spectrum {
            let tol = checks::range_tolerance(lo, hi, raw.rounding);
            let view = ndarray::ArrayView1::from(&x[..]);
            if let Some(m) =
                checks::check_in_range(checks::indexed_1d(view), lo, hi, tol, "ideal value")
            {
                self.rd.push(path, format!("{what}: {}", spectrum_fix(&m)));
                return None;
            }
        }
        Some(x)
    }

    fn support(&mut self, v: &Value, path: &str, n_sites: Option<usize>) -> Option<Vec<usize>> {
        let a = self.ints(v, path)?;
        if a.data.ndim() != 1 {
            self.rd.push(
                path,
                format!(
                    "{} has shape {:?}; store the sites as a list",
                    a.what,
                    a.data.shape()
                ),
            );
            return None;
        }
        let raw: Vec<i128> = a.data.iter().copied().collect();
        match checks::check_support(&raw, n_sites) {
            Ok(s) => Some(s),
            Err(m) => {
                self.rd.push(path, format!("{}: {m}", a.what));
                None
            }
        }
    }

    fn terms(
        &mut self,
        v: &Value,
        at: &str,
        n_sites: Option<usize>,
        support: Option<&[usize]>,
        spectrum: Option<(f64, f64)>,
    ) -> Option<Terms> {
        let o = self.rd.object(v, at, TERMS_KEYS)?;
        let sup_v = self.rd.required(o, at, "support")?;
        let sup_path = format!("{at}/support");
        let supports = self.term_supports(sup_v, &sup_path, n_sites)?;
        let a = supports.len();
        let w_v = self.rd.required(o, at, "weight")?;
        let w_path = format!("{at}/weight");
        let (w, _) = self.floats(w_v, &w_path)?;
        let weights = self.vector(w, &w_path, Some(a))?;
        if weights.iter().any(|x| !x.is_finite()) {
            self.rd.push(
                &w_path,
                "holds a weight that is NaN or infinite; store finite weights",
            );
            return None;
        }
        let s_v = self.rd.required(o, at, "spectrum")?;
        let s_path = format!("{at}/spectrum");
        let (s, _) = self.floats(s_v, &s_path)?;
        let what = s.what.clone();
        let shape = s.data.shape().to_vec();
        if shape != [a, 2] {
            self.rd.push(
                &s_path,
                format!("{what} has shape {shape:?}; store one [min, max] per term ({a} × 2)"),
            );
            return None;
        }
        let flat: Vec<f64> = s.data.iter().copied().collect();
        let spectra: Vec<[f64; 2]> = flat.chunks_exact(2).map(|p| [p[0], p[1]]).collect();
        if let Some(k) = spectra
            .iter()
            .position(|p| !(p[0].is_finite() && p[1].is_finite() && p[0] <= p[1]))
        {
            self.rd.push(
                &s_path,
                format!(
                    "{what}: term {k} has spectrum {:?}; give two finite numbers with min ≤ max",
                    spectra[k]
                ),
            );
            return None;
        }
        if let Some(sup) = support.filter(|s| !s.is_empty()) {
            if let Some(k) = supports
                .iter()
                .position(|t| t.iter().any(|x| !sup.contains(x)))
            {
                self.rd.push(&sup_path, format!("term {k} acts on sites outside the observable's support; correct the term or the support"));
                return None;
            }
        }
        if let Some((lo, hi)) = spectrum {
            if let Some(m) = checks::check_terms_consistent(&weights, &spectra, lo, hi) {
                self.rd.push(at, spectrum_fix(&m));
                return None;
            }
        }
        Some(Terms {
            supports,
            weights,
            spectra,
        })
    }

    /// Term supports: an inline list of site lists, or an A × m integer array padded with −1.
    fn term_supports(
        &mut self,
        v: &Value,
        path: &str,
        n_sites: Option<usize>,
    ) -> Option<Vec<Vec<usize>>> {
        let rows: Vec<Vec<i128>> = match v.as_array() {
            Some(list) if list.iter().all(Value::is_array) => {
                let mut rows = Vec::with_capacity(list.len());
                for (k, r) in list.iter().enumerate() {
                    let Some(r) = r.as_array().and_then(|r| {
                        r.iter()
                            .map(|x| x.as_i64().map(i128::from))
                            .collect::<Option<Vec<_>>>()
                    }) else {
                        self.rd
                            .push(format!("{path}/{k}"), "must be a list of integer sites");
                        return None;
                    };
                    rows.push(r);
                }
                rows
            }
            _ => {
                let a = self.ints(v, path)?;
                if a.data.ndim() != 2 {
                    self.rd.push(
                        path,
                        format!(
                            "{} has shape {:?}; store A × m sites padded with -1",
                            a.what,
                            a.data.shape()
                        ),
                    );
                    return None;
                }
                a.data
                    .outer_iter()
                    .map(|r| r.iter().copied().collect())
                    .collect()
            }
        };
        if rows.is_empty() {
            self.rd.push(
                path,
                "holds no term; give at least one, or leave out `terms`",
            );
            return None;
        }
        let mut out = Vec::with_capacity(rows.len());
        for (k, r) in rows.iter().enumerate() {
            match checks::parse_term_row(r, n_sites) {
                Ok(s) => out.push(s),
                Err(m) => {
                    self.rd.push(path, format!("term {k}: {m}"));
                    return None;
                }
            }
        }
        Some(out)
    }
}

/// The run-file reader's messages name the attributes; a description names `spectrum`.
fn spectrum_fix(message: &str) -> String {
    message
        .replace(
            "the attributes spectrum_min/spectrum_max",
            "the description's `spectrum`",
        )
        .replace("spectrum_min/spectrum_max", "`spectrum`")
}

/// An inline JSON array of any rank (nested lists of equal length) as an `ArrayD`.
fn inline<T: Clone>(
    v: &Value,
    path: &str,
    rd: &mut Reader,
    element: impl Fn(&Value) -> Option<T>,
) -> Option<ArrayD<T>> {
    let mut shape = Vec::new();
    let mut probe = v;
    while let Some(a) = probe.as_array() {
        shape.push(a.len());
        match a.first() {
            Some(first) => probe = first,
            None => break,
        }
    }
    let mut flat = Vec::new();
    if !flatten(v, &shape, &mut flat, &element) {
        rd.push(
            path,
            "is an inline array that is ragged or holds a value of the wrong kind; give nested lists of equal length holding numbers (integers where sites or counts are meant)",
        );
        return None;
    }
    ArrayD::from_shape_vec(shape, flat).ok()
}

fn flatten<T>(
    v: &Value,
    shape: &[usize],
    out: &mut Vec<T>,
    element: &impl Fn(&Value) -> Option<T>,
) -> bool {
    match shape.split_first() {
        None => match element(v) {
            Some(x) => {
                out.push(x);
                true
            }
            None => false,
        },
        Some((&n, rest)) => match v.as_array() {
            Some(a) if a.len() == n => a.iter().all(|x| flatten(x, rest, out, element)),
            _ => false,
        },
    }
}

#[cfg(test)]
mod tests;
