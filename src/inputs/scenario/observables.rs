//! The observables of a scenario: Pauli products or weighted sums of products in one product
//! basis (docs/scenario.md, "Observables").

use std::collections::BTreeSet;

use serde_json::Value;

use crate::model::Lattice;

use super::*;
use crate::inputs::json_reader::Reader;

pub(super) fn observables(rd: &mut Reader, v: &Value, l: &Lattice) -> Option<Vec<ObservableSpec>> {
    let Some(arr) = v.as_array() else {
        rd.push("/observables", "must be an array of observables");
        return None;
    };
    if arr.is_empty() || arr.len() > MAX_OBSERVABLES {
        rd.push(
            "/observables",
            format!("must hold 1 to {MAX_OBSERVABLES} observables"),
        );
        return None;
    }
    let mut out = Vec::new();
    let mut names = BTreeSet::new();
    let mut ok = true;
    for (k, o) in arr.iter().enumerate() {
        let path = format!("/observables/{k}");
        match observable(rd, o, &path, l) {
            Some(spec) => {
                if !names.insert(spec.name.clone()) {
                    rd.push(
                        format!("{path}/name"),
                        format!("\"{}\" is used twice; names must be unique", spec.name),
                    );
                    ok = false;
                }
                out.push(spec);
            }
            None => ok = false,
        }
    }
    out.sort_by(|a, b| a.name.as_bytes().cmp(b.name.as_bytes()));
    ok.then_some(out)
}

fn observable(rd: &mut Reader, v: &Value, path: &str, l: &Lattice) -> Option<ObservableSpec> {
    let obj = rd.object(
        v,
        path,
        &["name", "pauli", "sites", "over", "weights", "two_outcomes"],
    )?;
    let n = l.n_sites();
    let name = rd
        .required(obj, path, "name")
        .and_then(|x| rd.string(x, &format!("{path}/name")));
    if let Some(nm) = name {
        if nm.is_empty()
            || !nm
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || "_-.".contains(c))
        {
            rd.push(
                format!("{path}/name"),
                "must be letters, digits, '_', '-' or '.' (it names an HDF5 group)",
            );
        }
    }
    let pauli = rd
        .required(obj, path, "pauli")
        .and_then(|x| rd.string(x, &format!("{path}/pauli")));
    if let Some(p) = pauli {
        if p.is_empty() || !p.chars().all(|c| "XYZ".contains(c)) {
            rd.push(
                format!("{path}/pauli"),
                "must be a non-empty string of the letters X, Y and Z, one per site",
            );
            return None;
        }
    }
    let (name, pauli) = (name?.to_string(), pauli?);
    let arity = pauli.chars().count();
    let site_list = |rd: &mut Reader, x: &Value, p: &str| -> Option<Vec<usize>> {
        let sites: Option<Vec<usize>> = x
            .as_array()
            .and_then(|a| a.iter().map(|s| s.as_u64().map(|s| s as usize)).collect());
        let Some(sites) = sites else {
            rd.push(p, "must be an array of site indices");
            return None;
        };
        if sites.len() != arity {
            rd.push(
                p,
                format!(
                    "has {} sites but the Pauli string \"{pauli}\" has {arity} letters",
                    sites.len()
                ),
            );
            return None;
        }
        if let Some(s) = sites.iter().find(|&&s| s >= n) {
            rd.push(
                p,
                format!(
                    "site {s} does not exist; the lattice has sites 0 to {}",
                    n - 1
                ),
            );
            return None;
        }
        let distinct: BTreeSet<_> = sites.iter().collect();
        if distinct.len() != sites.len() {
            rd.push(p, "repeats a site; each site appears once in a product");
            return None;
        }
        Some(sites)
    };
    match (obj.get("sites"), obj.get("over")) {
        (Some(s), None) => {
            if obj.contains_key("weights") {
                rd.push(
                    format!("{path}/weights"),
                    "belongs to an observable given with \"over\"; remove it",
                );
            }
            // A single Pauli product has the outcomes ±1: the run file may declare them.
            let two_outcomes = match obj.get("two_outcomes") {
                None => false,
                Some(Value::Bool(b)) => *b,
                Some(_) => {
                    rd.push(format!("{path}/two_outcomes"), "must be true or false");
                    false
                }
            };
            let sites = site_list(rd, s, &format!("{path}/sites"))?;
            Some(ObservableSpec {
                name,
                terms: vec![ObservableTerm {
                    letters: pauli.to_string(),
                    sites,
                    weight: 1.0,
                }],
                averaged: false,
                two_outcomes,
            })
        }
        (None, Some(over)) => {
            if obj.contains_key("two_outcomes") {
                rd.push(
                    format!("{path}/two_outcomes"),
                    "belongs to a single product given with \"sites\" (a weighted sum has more than two outcomes); remove it",
                );
            }
            let supports: Vec<Vec<usize>> = match over.as_str() {
                Some("each_site") if arity == 1 => (0..n).map(|i| vec![i]).collect(),
                Some("each_bond") if arity == 2 => l
                    .bonds()
                    .iter()
                    .map(|b| vec![b[0] as usize, b[1] as usize])
                    .collect(),
                Some(s @ ("each_site" | "each_bond")) => {
                    rd.push(
                        format!("{path}/over"),
                        format!(
                            "\"{s}\" needs a Pauli string of {} letter(s), got \"{pauli}\"",
                            if s == "each_site" { 1 } else { 2 }
                        ),
                    );
                    return None;
                }
                Some(s) => {
                    rd.push(format!("{path}/over"), format!("\"{s}\" is not known; use \"each_site\", \"each_bond\" or an array of site lists"));
                    return None;
                }
                None => {
                    let Some(arr) = over.as_array() else {
                        rd.push(
                            format!("{path}/over"),
                            "must be \"each_site\", \"each_bond\" or an array of site lists",
                        );
                        return None;
                    };
                    let mut v = Vec::new();
                    for (a, x) in arr.iter().enumerate() {
                        v.push(site_list(rd, x, &format!("{path}/over/{a}"))?);
                    }
                    v
                }
            };
            if supports.is_empty() {
                rd.push(
                    format!("{path}/over"),
                    "gives no terms (a lattice without bonds?)",
                );
                return None;
            }
            let count = supports.len() as f64;
            let weights: Vec<f64> = match obj.get("weights") {
                None => vec![1.0 / count; supports.len()],
                Some(w) => match w.as_str() {
                    Some("mean") => vec![1.0 / count; supports.len()],
                    Some("sum") => vec![1.0; supports.len()],
                    Some("staggered_mean") => supports
                        .iter()
                        .map(|s| staggered_sign(l, s[0]) / count)
                        .collect(),
                    Some(other) => {
                        rd.push(format!("{path}/weights"), format!("\"{other}\" is not known; use \"mean\", \"sum\", \"staggered_mean\" or an array of numbers"));
                        return None;
                    }
                    None => rd.per_item(w, &format!("{path}/weights"), supports.len(), "terms")?,
                },
            };
            // One product basis: every site must carry the same letter in every term.
            let mut letter_at = vec![None; n];
            for s in &supports {
                for (c, &site) in pauli.chars().zip(s) {
                    match letter_at[site] {
                        None => letter_at[site] = Some(c),
                        Some(d) if d == c => {}
                        Some(d) => {
                            rd.push(
                                format!("{path}/over"),
                                format!("site {site} is measured as {d} in one term and {c} in another; all terms of one observable must be measurable in one product basis"),
                            );
                            return None;
                        }
                    }
                }
            }
            Some(ObservableSpec {
                name,
                terms: supports
                    .into_iter()
                    .zip(weights)
                    .map(|(sites, weight)| ObservableTerm {
                        letters: pauli.to_string(),
                        sites,
                        weight,
                    })
                    .collect(),
                averaged: true,
                two_outcomes: false,
            })
        }
        (Some(_), Some(_)) => {
            rd.push(path, "gives both \"sites\" and \"over\"; use \"sites\" for one product, \"over\" for a weighted sum");
            None
        }
        (None, None) => {
            rd.push(
                path,
                "needs \"sites\" (one product) or \"over\" (a weighted sum of products)",
            );
            None
        }
    }
}
