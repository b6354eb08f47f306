//! The optional term structure of an observable `O = Σ_a w_a O_a` (`terms_support`,
//! `terms_weight`, `terms_spectrum`): all three or none, checked against the run and the
//! observable's support (docs/run-format.md, "Term structure").

use hdf5::Group;
use ndarray::{Ix1, Ix2};

use crate::inputs::run_file::access::{f64_dataset, int_dataset, open_dataset, Collector};
use crate::inputs::run_file::{checks, ObservableSummary};
use crate::model::Terms;

use super::*;

/// The optional term structure; `Some(None)` when absent, `None` when broken.
pub(super) fn read_terms(
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
