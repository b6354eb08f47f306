//! The physical system of a scenario: lattice, XXZ Hamiltonian with fields, initial product
//! state and recorded times (docs/scenario.md, "Lattice" to "Times").

use serde_json::Value;

use crate::model::{Boundary, Geometry, Lattice};

use super::*;
use crate::inputs::json_reader::Reader;

pub(super) fn lattice(rd: &mut Reader, v: &Value) -> Option<Lattice> {
    let obj = rd.object(
        v,
        "/lattice",
        &["geometry", "shape", "boundary", "n_sites", "bonds"],
    )?;
    let geometry = rd.required(obj, "/lattice", "geometry").and_then(|g| {
        let s = rd.string(g, "/lattice/geometry")?;
        let geo = Geometry::parse(s);
        if geo.is_none() {
            rd.push(
                "/lattice/geometry",
                format!("\"{s}\" is not a geometry; use chain, square, cubic or graph"),
            );
        }
        geo
    })?;
    let boundary = match obj.get("boundary") {
        None if geometry == Geometry::Graph => Some(Boundary::Open),
        None => {
            rd.push(
                "/lattice/boundary",
                "is missing; use \"open\" or \"periodic\"",
            );
            None
        }
        Some(b) => {
            let s = rd.string(b, "/lattice/boundary")?;
            let bd = Boundary::parse(s);
            if bd.is_none() {
                rd.push(
                    "/lattice/boundary",
                    format!("\"{s}\" is not a boundary; use open or periodic"),
                );
            }
            bd
        }
    }?;
    let bonds_of = |rd: &mut Reader, b: &Value| -> Option<Vec<[usize; 2]>> {
        let arr = b.as_array();
        if arr.is_none() {
            rd.push("/lattice/bonds", "must be an array of [site, site] pairs");
        }
        let mut out = Vec::new();
        let mut ok = true;
        for (i, pair) in arr?.iter().enumerate() {
            match pair
                .as_array()
                .map(|p| p.iter().map(Value::as_u64).collect::<Vec<_>>())
            {
                Some(p) if p.len() == 2 && p.iter().all(Option::is_some) => {
                    out.push([p[0]? as usize, p[1]? as usize])
                }
                _ => {
                    rd.push(
                        format!("/lattice/bonds/{i}"),
                        "must be a pair of site indices [a, b]",
                    );
                    ok = false;
                }
            }
        }
        ok.then_some(out)
    };
    let built = if geometry == Geometry::Graph {
        if obj.contains_key("shape") {
            rd.push(
                "/lattice/shape",
                "a graph has no shape; give n_sites and bonds instead",
            );
        }
        let n = rd
            .required(obj, "/lattice", "n_sites")
            .and_then(|x| rd.integer(x, "/lattice/n_sites", 1, MAX_SITES as u64))?;
        let bonds = rd
            .required(obj, "/lattice", "bonds")
            .and_then(|b| bonds_of(rd, b))?;
        Lattice::graph(n as usize, &bonds, boundary)
    } else {
        if obj.contains_key("n_sites") {
            rd.push(
                "/lattice/n_sites",
                "is only for a graph; the shape gives the number of sites",
            );
        }
        let shape_v = rd.required(obj, "/lattice", "shape")?;
        let shape: Option<Vec<usize>> = shape_v
            .as_array()
            .and_then(|a| a.iter().map(|x| x.as_u64().map(|x| x as usize)).collect());
        let Some(shape) = shape else {
            rd.push("/lattice/shape", "must be an array of positive integers");
            return None;
        };
        let total = shape.iter().try_fold(1usize, |a, &l| a.checked_mul(l));
        if total.is_none_or(|t| t > MAX_SITES) {
            rd.push(
                "/lattice/shape",
                format!(
                    "gives {} sites; the simulator handles at most {MAX_SITES} (2^{MAX_SITES} amplitudes)",
                    total.map_or("too many".to_string(), |t| t.to_string())
                ),
            );
            return None;
        }
        let l = Lattice::regular(geometry, &shape, boundary);
        if let (Ok(l), Some(b)) = (&l, obj.get("bonds")) {
            if let Some(bonds) = bonds_of(rd, b) {
                if !l.same_bonds(&bonds) {
                    rd.push("/lattice/bonds", "do not agree with the geometry (order of docs/scenario.md); remove them or fix them");
                }
            }
        }
        l
    };
    match built {
        Ok(l) => Some(l),
        Err(e) => {
            rd.push("/lattice", format!("{e}"));
            None
        }
    }
}

type HamiltonianParts = (Vec<f64>, bool, f64, Vec<f64>, Vec<f64>);

pub(super) fn hamiltonian(rd: &mut Reader, v: &Value, l: &Lattice) -> Option<HamiltonianParts> {
    let obj = rd.object(v, "/hamiltonian", &["J", "anisotropy", "hx", "hz"])?;
    let jv = rd.required(obj, "/hamiltonian", "J");
    let coupling_uniform = jv.is_some_and(|j| !j.is_array());
    let j = jv.and_then(|j| rd.per_item(j, "/hamiltonian/J", l.n_bonds(), "bonds"));
    let delta = rd
        .required(obj, "/hamiltonian", "anisotropy")
        .and_then(|d| rd.number(d, "/hamiltonian/anisotropy"));
    let n = l.n_sites();
    let field = |rd: &mut Reader, key: &str| match obj.get(key) {
        None => Some(vec![0.0; n]),
        Some(f) => rd.per_item(f, &format!("/hamiltonian/{key}"), n, "sites"),
    };
    let hx = field(rd, "hx");
    let hz = field(rd, "hz");
    Some((j?, coupling_uniform, delta?, hx?, hz?))
}

/// The checkerboard sign of a site: `(−1)^(x+y+z)` from its row-major coordinates on a
/// regular lattice, `(−1)^i` on a graph.
pub fn staggered_sign(l: &Lattice, site: usize) -> f64 {
    let shape = l.shape();
    let mut rest = site;
    let mut sum = 0usize;
    if shape.is_empty() {
        sum = site;
    } else {
        for a in (0..shape.len()).rev() {
            sum += rest % shape[a];
            rest /= shape[a];
        }
    }
    if sum % 2 == 0 {
        1.0
    } else {
        -1.0
    }
}

pub(super) fn initial_state(
    rd: &mut Reader,
    v: &Value,
    n: usize,
    l: Option<&Lattice>,
) -> Option<Vec<SiteState>> {
    let labels = || {
        SiteState::ALL
            .iter()
            .map(|(_, s)| format!("\"{s}\""))
            .collect::<Vec<_>>()
            .join(", ")
    };
    if let Some(s) = v.as_str() {
        if s == "neel" {
            let l = l?;
            return Some(
                (0..n)
                    .map(|i| {
                        if staggered_sign(l, i) > 0.0 {
                            SiteState::Zero
                        } else {
                            SiteState::One
                        }
                    })
                    .collect(),
            );
        }
        return match SiteState::parse(s) {
            Some(st) => Some(vec![st; n]),
            None => {
                rd.push(
                    "/initial_state",
                    format!("\"{s}\" is not a state label; use one of {}, \"neel\", or an array of labels", labels()),
                );
                None
            }
        };
    }
    let Some(arr) = v.as_array() else {
        rd.push(
            "/initial_state",
            "must be a label, \"neel\", or an array of one label per site",
        );
        return None;
    };
    if arr.len() != n {
        rd.push(
            "/initial_state",
            format!("has {} labels but the lattice has {n} sites", arr.len()),
        );
        return None;
    }
    let mut out = Vec::new();
    let mut ok = true;
    for (i, x) in arr.iter().enumerate() {
        match x.as_str().and_then(SiteState::parse) {
            Some(s) => out.push(s),
            None => {
                rd.push(
                    format!("/initial_state/{i}"),
                    format!("is not a state label; use one of {}", labels()),
                );
                ok = false;
            }
        }
    }
    ok.then_some(out)
}

pub(super) fn times(rd: &mut Reader, v: &Value) -> Option<Vec<f64>> {
    let list = if let Some(arr) = v.as_array() {
        let mut out = Vec::new();
        let mut ok = true;
        for (i, x) in arr.iter().enumerate() {
            match rd.number(x, &format!("/times/{i}")) {
                Some(t) => out.push(t),
                None => ok = false,
            }
        }
        if !ok {
            return None;
        }
        out
    } else if v.is_object() {
        let obj = rd.object(v, "/times", &["start", "stop", "count"])?;
        let start = rd
            .required(obj, "/times", "start")
            .and_then(|x| rd.number(x, "/times/start"));
        let stop = rd
            .required(obj, "/times", "stop")
            .and_then(|x| rd.number(x, "/times/stop"));
        let count = rd
            .required(obj, "/times", "count")
            .and_then(|x| rd.integer(x, "/times/count", 1, MAX_TIMES as u64));
        let (start, stop, count) = (start?, stop?, count? as usize);
        if count == 1 {
            vec![start]
        } else {
            let step = (stop - start) / (count - 1) as f64;
            (0..count)
                .map(|k| {
                    if k + 1 == count {
                        stop
                    } else {
                        start + step * k as f64
                    }
                })
                .collect()
        }
    } else {
        rd.push(
            "/times",
            "must be an array of times or {\"start\", \"stop\", \"count\"}",
        );
        return None;
    };
    if list.is_empty() || list.len() > MAX_TIMES {
        rd.push("/times", format!("must hold 1 to {MAX_TIMES} times"));
        return None;
    }
    if list[0] < 0.0 {
        rd.push(
            "/times",
            "must not be negative (times count from the start of the evolution)",
        );
        return None;
    }
    if let Some(k) = list.windows(2).position(|w| w[1] < w[0]) {
        rd.push(
            format!("/times/{}", k + 1),
            "is smaller than the time before; times must be non-decreasing",
        );
        return None;
    }
    Some(list)
}
