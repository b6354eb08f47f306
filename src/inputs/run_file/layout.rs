//! The run-level items of layout v1: root attributes, `/times`, `/lattice`, `/hamiltonian`.
//!
//! Each reader records its problems and fills the summary with what it could read, then
//! returns its part of the model only if that part is sound; [`read_header`] assembles the
//! run's outline (the observables are read one at a time afterwards).

use ndarray::Ix1;

use super::access::{
    attr_problem, f64_attr, f64_dataset, int_attr, int_dataset, int_vec_attr, note_unknown,
    open_attr, open_dataset, open_group, string_attr, Collector,
};
use super::checks;
use super::observables;
use super::stream::RunOutline;
use super::{RunSummary, TimesSummary};
use crate::model::{Boundary, FrequencyUnit, Geometry, Hamiltonian, Lattice, TimeUnit};

const ROOT_ATTRS: &[&str] = &[
    "format",
    "format_version",
    "run_id",
    "time_unit",
    "n_sites",
    "description",
];
const ROOT_MEMBERS: &[&str] = &["times", "lattice", "hamiltonian", "observables"];
const LATTICE_ATTRS: &[&str] = &["geometry", "shape", "boundary"];
const LATTICE_MEMBERS: &[&str] = &["bonds"];
const HAMILTONIAN_ATTRS: &[&str] = &["energy_unit", "bond_norm_max", "interaction_range"];
const HAMILTONIAN_MEMBERS: &[&str] = &["bond_norms"];

/// Reads everything but the observables: the outline (with no observables yet) when every
/// part is sound, and what the observables are checked against.
pub fn read_header(
    c: &mut Collector,
    file: &hdf5::File,
    s: &mut RunSummary,
) -> (Option<RunOutline>, observables::Context) {
    note_unknown(c, file, "/", ROOT_ATTRS, ROOT_MEMBERS);
    let root = read_root(c, file, s);
    let times = read_times(c, file, s);
    let lattice = read_lattice(c, file, root.n_sites, s);
    let n_bonds = lattice.as_ref().map(Lattice::n_bonds);
    let hamiltonian = read_hamiltonian(c, file, n_bonds, s);
    let ctx = observables::Context {
        n_sites: root.n_sites,
        n_times: times.as_ref().map(Vec::len),
    };
    let outline = (|| {
        Some(RunOutline {
            run_id: root.run_id?,
            time_unit: root.time_unit?,
            description: root.description,
            times: times?,
            lattice: lattice?,
            hamiltonian: hamiltonian?,
            realizations: 0,
            observables: Vec::new(),
        })
    })();
    (outline, ctx)
}

struct Root {
    run_id: Option<String>,
    time_unit: Option<TimeUnit>,
    n_sites: Option<usize>,
    description: Option<String>,
}

fn read_root(c: &mut Collector, file: &hdf5::File, s: &mut RunSummary) -> Root {
    let at = "/";
    let format = string_attr(c, file, at, "format", Some("set it to \"quassay-run\""));
    if let Some(f) = &format {
        if f != "quassay-run" {
            attr_problem(c, at, "format", format!("is \"{f}\", not \"quassay-run\"; this is not a quassay run file, or its root attribute `format` must be set to \"quassay-run\""));
        }
    }
    s.format = format;
    let version = int_attr(
        c,
        file,
        at,
        "format_version",
        Some("set it to the integer 1"),
    );
    if let Some(v) = version {
        if v != 1 {
            attr_problem(c, at, "format_version", format!("is {v}; this version of quassay reads layout version 1 only (write the file as version 1, or use a newer quassay)"));
        }
        s.format_version = i64::try_from(v).ok();
    }
    let run_id = string_attr(
        c,
        file,
        at,
        "run_id",
        Some("add the lab's identifier of the run as a string"),
    );
    if run_id.as_deref() == Some("") {
        attr_problem(
            c,
            at,
            "run_id",
            "is empty; give the lab's identifier of the run",
        );
    }
    s.run_id = run_id.clone();
    let unit_text = string_attr(
        c,
        file,
        at,
        "time_unit",
        Some("add the unit of /times: one of s, ms, us, ns"),
    );
    let time_unit = unit_text.as_deref().and_then(|u| {
        let parsed = TimeUnit::parse(u);
        if parsed.is_none() {
            attr_problem(c, at, "time_unit", format!("is \"{u}\", which is not a time unit quassay knows; use one of s, ms, us, ns (units are never assumed)"));
        }
        parsed
    });
    s.time_unit = unit_text;
    let n = int_attr(
        c,
        file,
        at,
        "n_sites",
        Some("add the number of sites as an integer"),
    );
    let n_sites = n.and_then(|n| {
        if n < 1 || n >= i128::from(u32::MAX) {
            attr_problem(
                c,
                at,
                "n_sites",
                format!("is {n}; the number of sites must be between 1 and 2^32 - 2"),
            );
            None
        } else {
            Some(n as usize)
        }
    });
    s.n_sites = n_sites.map(|n| n as u64);
    let description = string_attr(c, file, at, "description", None);
    s.description = description.clone();
    Root {
        run_id: run_id.filter(|r| !r.is_empty()),
        time_unit,
        n_sites,
        description,
    }
}

fn read_times(c: &mut Collector, file: &hdf5::File, s: &mut RunSummary) -> Option<Vec<f64>> {
    let path = "/times";
    let Some(ds) = open_dataset(c, file, "/", "times") else {
        if !file.link_exists("times") {
            c.problem(path, "is missing; add a float64 vector /times of the measurement times (time since the start of the evolution, in time_unit)");
        }
        return None;
    };
    let (a, stored) = f64_dataset(c, &ds, path)?;
    let Ok(v) = a.into_dimensionality::<Ix1>() else {
        c.problem(
            path,
            format!(
                "has shape {:?}; store the times as a vector of length T",
                ds.shape()
            ),
        );
        return None;
    };
    let times = v.to_vec();
    s.times = Some(TimesSummary {
        count: times.len(),
        first: times.first().copied(),
        last: times.last().copied(),
        stored_as: stored.describe().to_string(),
    });
    let msgs = checks::check_times(&times);
    let ok = msgs.is_empty();
    for m in msgs {
        c.problem(path, m);
    }
    ok.then_some(times)
}

fn read_lattice(
    c: &mut Collector,
    file: &hdf5::File,
    n_sites: Option<usize>,
    s: &mut RunSummary,
) -> Option<Lattice> {
    let at = "/lattice";
    let g = open_group(
        c,
        file,
        "/",
        "lattice",
        "add a group /lattice with attributes geometry, shape and boundary",
    )?;
    note_unknown(c, &g, at, LATTICE_ATTRS, LATTICE_MEMBERS);
    let geometry_text = string_attr(
        c,
        &g,
        at,
        "geometry",
        Some("add one of chain, square, cubic, graph"),
    );
    let geometry = geometry_text.as_deref().and_then(|t| {
        let g = Geometry::parse(t);
        if g.is_none() {
            attr_problem(
                c,
                at,
                "geometry",
                format!("is \"{t}\"; use one of chain, square, cubic, graph"),
            );
        }
        g
    });
    s.lattice.geometry = geometry_text;
    let boundary_text = string_attr(c, &g, at, "boundary", Some("add open or periodic"));
    let boundary = boundary_text.as_deref().and_then(|t| {
        let b = Boundary::parse(t);
        if b.is_none() {
            attr_problem(
                c,
                at,
                "boundary",
                format!("is \"{t}\"; use open or periodic"),
            );
        }
        b
    });
    s.lattice.boundary = boundary_text;

    let shape_raw = int_vec_attr(c, &g, at, "shape");
    let has_shape_attr = open_attr(&g, "shape").is_some();
    let shape = match (geometry, shape_raw) {
        (Some(Geometry::Graph), _) if has_shape_attr => {
            attr_problem(
                c,
                at,
                "shape",
                "is given for a graph; a graph has no shape, remove the attribute",
            );
            None
        }
        (Some(Geometry::Graph), _) => Some(Vec::new()),
        (Some(geo), None) => {
            if !has_shape_attr {
                attr_problem(
                    c,
                    at,
                    "shape",
                    format!(
                        "is missing; a {} needs its shape as {} positive integers",
                        geo.as_str(),
                        geo.dimension()
                    ),
                );
            }
            None
        }
        (geo, Some(raw)) => {
            s.lattice.shape = Some(
                raw.iter()
                    .map(|&x| x.clamp(0, i128::from(u64::MAX)) as u64)
                    .collect(),
            );
            check_shape(c, at, geo, &raw, n_sites)
        }
        (None, None) => None,
    };

    let bonds_path = "/lattice/bonds";
    let bonds = open_dataset(c, &g, at, "bonds").and_then(|ds| read_bonds(c, &ds, bonds_path));
    s.lattice.bonds_stored = g.link_exists("bonds");

    let (geometry, boundary, shape) = (geometry?, boundary?, shape?);
    if geometry == Geometry::Graph {
        let Some(bonds) = bonds else {
            if !s.lattice.bonds_stored {
                c.problem(
                    bonds_path,
                    "is missing; a graph lists its bonds as a B × 2 integer dataset /lattice/bonds",
                );
            }
            return None;
        };
        s.lattice.n_bonds = Some(bonds.len());
        return match Lattice::graph(n_sites?, &bonds, boundary) {
            Ok(l) => Some(l),
            Err(e) => {
                c.problem(
                    bonds_path,
                    format!("{e}; list each bond once, as two different sites below n_sites"),
                );
                None
            }
        };
    }
    let lattice = match Lattice::regular(geometry, &shape, boundary) {
        Ok(l) => l,
        Err(e) => {
            c.problem(at, format!("{e}; correct the attributes shape or boundary"));
            return None;
        }
    };
    s.lattice.n_bonds = Some(lattice.n_bonds());
    if let Some(bonds) = bonds {
        if !lattice.same_bonds(&bonds) {
            let k = (0..bonds.len().max(lattice.n_bonds()))
                .find(|&k| match (bonds.get(k), lattice.bonds().get(k)) {
                    (Some(a), Some(b)) => a[0] != b[0] as usize || a[1] != b[1] as usize,
                    _ => true,
                })
                .unwrap_or(0);
            let file_bond = bonds
                .get(k)
                .map_or("none".to_string(), |b| format!("[{}, {}]", b[0], b[1]));
            let geo_bond = lattice
                .bonds()
                .get(k)
                .map_or("none".to_string(), |b| format!("[{}, {}]", b[0], b[1]));
            c.problem(bonds_path, format!(
                "does not agree with the {} {} lattice of shape {:?}: {} bonds stored, {} expected, first difference at bond {k} (stored {file_bond}, expected {geo_bond}); remove the dataset, or store the bonds in the order of docs/run-format.md",
                boundary.as_str(), geometry.as_str(), shape, bonds.len(), lattice.n_bonds()
            ));
            return None;
        }
    }
    Some(lattice)
}

fn check_shape(
    c: &mut Collector,
    at: &str,
    geometry: Option<Geometry>,
    raw: &[i128],
    n_sites: Option<usize>,
) -> Option<Vec<usize>> {
    let geometry = geometry?;
    if raw.len() != geometry.dimension() || raw.iter().any(|&x| x < 1 || x >= i128::from(u32::MAX))
    {
        attr_problem(
            c,
            at,
            "shape",
            format!(
                "is {raw:?}; a {} needs {} positive integers",
                geometry.as_str(),
                geometry.dimension()
            ),
        );
        return None;
    }
    let shape: Vec<usize> = raw.iter().map(|&x| x as usize).collect();
    let product = shape.iter().try_fold(1usize, |a, &l| a.checked_mul(l));
    if let (Some(n), p) = (n_sites, product) {
        if p != Some(n) {
            attr_problem(c, at, "shape", format!("is {shape:?}, which has {} sites, but the root attribute n_sites is {n}; make them agree", p.map_or("too many".to_string(), |p| p.to_string())));
            return None;
        }
    }
    Some(shape)
}

fn read_bonds(c: &mut Collector, ds: &hdf5::Dataset, path: &str) -> Option<Vec<[usize; 2]>> {
    let a = int_dataset(c, ds, path)?;
    let shape = a.shape().to_vec();
    if shape.len() != 2 || shape[1] != 2 {
        c.problem(
            path,
            format!("has shape {shape:?}; store the bonds as a B × 2 integer dataset"),
        );
        return None;
    }
    if let Some(pos) = a.iter().position(|&x| x < 0 || x > i128::from(u32::MAX)) {
        c.problem(
            path,
            format!(
                "bond {} has a negative or too large site number {}; sites are numbered from 0",
                pos / 2,
                a.iter().nth(pos).copied().unwrap_or(0)
            ),
        );
        return None;
    }
    let flat: Vec<usize> = a.iter().map(|&x| x as usize).collect();
    Some(flat.chunks_exact(2).map(|p| [p[0], p[1]]).collect())
}

fn read_hamiltonian(
    c: &mut Collector,
    file: &hdf5::File,
    n_bonds: Option<usize>,
    s: &mut RunSummary,
) -> Option<Hamiltonian> {
    let at = "/hamiltonian";
    let g = open_group(
        c,
        file,
        "/",
        "hamiltonian",
        "add a group /hamiltonian with attributes energy_unit and bond_norm_max",
    )?;
    note_unknown(c, &g, at, HAMILTONIAN_ATTRS, HAMILTONIAN_MEMBERS);
    let accepted = FrequencyUnit::accepted();
    let unit_text = string_attr(
        c,
        &g,
        at,
        "energy_unit",
        Some(&format!(
            "add the unit of the bond norms: one of {accepted}"
        )),
    );
    let energy_unit = unit_text.as_deref().and_then(|u| {
        let parsed = FrequencyUnit::parse(u);
        if parsed.is_none() {
            attr_problem(c, at, "energy_unit", format!("is \"{u}\", which is not a frequency unit quassay knows; use one of {accepted} (units are case-sensitive and never assumed)"));
        }
        parsed
    });
    s.hamiltonian.energy_unit = unit_text;
    let max = f64_attr(
        c,
        &g,
        at,
        "bond_norm_max",
        Some("add the largest norm of one bond term of H (identity part removed), in energy_unit"),
    );
    s.hamiltonian.bond_norm_max = max;
    let max = max.filter(|m| {
        let ok = m.is_finite() && *m >= 0.0;
        if !ok {
            attr_problem(
                c,
                at,
                "bond_norm_max",
                format!("is {m}; a norm must be finite and ≥ 0"),
            );
        }
        ok
    });
    let range = match int_attr(c, &g, at, "interaction_range", None) {
        None if open_attr(&g, "interaction_range").is_some() => None,
        None => Some(1),
        Some(r) if (1..=i128::from(u32::MAX)).contains(&r) => Some(r as u32),
        Some(r) => {
            attr_problem(
                c,
                at,
                "interaction_range",
                format!("is {r}; the range of the couplings is an integer ≥ 1 (in bonds)"),
            );
            None
        }
    };
    s.hamiltonian.interaction_range = range.map(i64::from);

    let path = "/hamiltonian/bond_norms";
    let mut norms_ok;
    let bond_norms = match open_dataset(c, &g, at, "bond_norms") {
        None => {
            norms_ok = !g.link_exists("bond_norms");
            None
        }
        Some(ds) => {
            let v = f64_dataset(c, &ds, path).and_then(|(a, _)| {
                let v = a.into_dimensionality::<Ix1>().ok().map(|v| v.to_vec());
                if v.is_none() {
                    c.problem(
                        path,
                        format!(
                            "has shape {:?}; store one norm per bond as a vector",
                            ds.shape()
                        ),
                    );
                }
                v
            });
            norms_ok = v.is_some();
            if let Some(v) = &v {
                if !v.is_empty() {
                    let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
                    let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                    s.hamiltonian.bond_norms_range = Some([lo, hi]);
                }
                if let Some(n) = n_bonds {
                    if v.len() != n {
                        c.problem(path, format!("has {} norms but the lattice has {n} bonds; give one norm per bond, in bond order", v.len()));
                        norms_ok = false;
                    }
                }
                if let Some(k) = v.iter().position(|x| !x.is_finite() || *x < 0.0) {
                    c.problem(path, format!("norm {} of bond {k} is not a finite number ≥ 0; every norm must be finite and ≥ 0", v[k]));
                    norms_ok = false;
                } else if let Some(m) = max {
                    if let Some(k) = v.iter().position(|&x| x > m * (1.0 + 1e-12)) {
                        c.problem(path, format!("norm {} of bond {k} exceeds bond_norm_max = {m}; bond_norm_max must be the largest bond norm", v[k]));
                        norms_ok = false;
                    }
                }
            }
            v
        }
    };
    if !norms_ok {
        return None;
    }
    Some(Hamiltonian {
        energy_unit: energy_unit?,
        bond_norm_max: max?,
        bond_norms,
        interaction_range: range?,
    })
}
