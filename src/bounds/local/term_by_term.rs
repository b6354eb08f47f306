//! The term-by-term statement of an observable that is a sum of local terms,
//! `O = Σ_a w_a O_a` (docs/method.md §5, "Sums of local terms, term by term"): one exposure per
//! term, the sensitivity `E_i = min(s_O t, s_O T_i, Σ_a |w_a| s_a T_{a,i})` per source and time,
//! and the terms of §3 on those sensitivities.

use crate::bounds::light_cone::{
    Comparison, ComparisonPlan, Exposure, ExposureCache, InstanceIndex, Unavailable,
};
use crate::model::Terms;
use rayon::prelude::*;

use super::*;

/// The term-by-term statement of an observable `O = Σ_a w_a O_a` (docs/method.md §5, "Sums
/// that are sums of local terms"): per time, the terms and how many sources (with `δ_i > 0`)
/// took each form of the sensitivity.
#[derive(Debug, Clone, PartialEq)]
pub struct TermByTerm {
    /// The number of terms `A`.
    pub n_terms: usize,
    /// The terms per time.
    pub points: Vec<LocalTerms>,
    /// Per time, the number of sources whose sensitivity `E_i(t)` was `s_O·t` (global),
    /// `s_O·T_i(t)` (whole support) or `Σ_a |w_a| s_a T_{a,i}(t)` (term by term), ties going
    /// to the earlier form.
    pub forms: Vec<[usize; 3]>,
    /// The number of terms whose region meets the boundary and that took the comparison with
    /// an interior region (docs/method.md §5); 0 when every term has its exact region.
    pub compared: usize,
}

/// The least work, in (terms whose region meets the boundary) × (sources per region), from
/// which those terms take the comparison with an interior region instead of their exact
/// regions: below it the exact regions are cheap (a few seconds at most) and tighter. A
/// number fixed by the record and the times, so the choice is made before any data are seen.
pub const COMPARISON_WORK: usize = 1 << 18;

/// The plan of the comparison if it applies to this sum and pays: single-site terms whose
/// region meets the boundary, enough of them (see [`COMPARISON_WORK`]).
pub(super) fn comparison_plan(inp: &LocalInputs, terms: &Terms) -> Option<ComparisonPlan> {
    let plan = ComparisonPlan::new(inp.graph, inp.instances, inp.times)?;
    let boundary = (0..terms.supports.len())
        .filter(|&a| compared_site(&plan, terms, a, inp.graph.lattice().n_sites()).is_some())
        .count();
    let work = boundary.saturating_mul(plan.region_estimate(inp.instances.len()));
    (work >= COMPARISON_WORK).then_some(plan)
}

/// The site of term `a` if it is a single-site term with a nonzero coefficient whose region
/// meets the boundary (the terms the comparison replaces).
fn compared_site(plan: &ComparisonPlan, terms: &Terms, a: usize, n_sites: usize) -> Option<usize> {
    let [lo, hi] = terms.spectra[a];
    let c = terms.weights[a].abs() * (hi - lo);
    match terms.supports[a].as_slice() {
        &[s] if s < n_sites && c != 0.0 && !plan.interior(s) => Some(s),
        _ => None,
    }
}

/// The term-by-term statement: per source `E_i(t) = min(s_O·t, s_O·T_i(t), Σ_a |w_a| s_a
/// T_{a,i}(t))`, with `T_i` from `whole` (the exposure of the whole support, `inp.support`)
/// and `T_{a,i}` from one [`Exposure`] per term. A source outside the region of term `a`
/// contributes `n_Y(i)·C_a(t)` (the tail bound); that is added to every source, in or out of
/// the region (it only grows the sum, so the bound stays valid, and it is below `10^{-30}·t`
/// per term and bond).
///
/// The bias takes the smallest of `(s_O/2)(Π_{i∈B} φ_i(2t) − 1) + Σ_{i∉B} δ_i σ_i E_i` over
/// `B` empty, every prefix of the sources sorted by decreasing `δ_i σ_i E_i` (an order fixed
/// by the record and the times, not by the data), and all sources. The product form keeps
/// `s_O`: it bounds `|E f(g) − f(0)|` for the sources of `B` without using locality, so it is
/// valid for any `B`; the remainder uses the sensitivity of each source left out.
///
/// Work: one region search per term (time proportional to the term's region); the walk sums
/// and exposures are computed once per region shape and reused, to the bit, by the terms whose
/// region has the same shape (translates on a uniform lattice away from its boundary:
/// [`ExposureCache`]). On a uniform open lattice, when enough single-site terms have regions
/// that meet the boundary ([`COMPARISON_WORK`]), those terms take the values of one interior
/// region instead (docs/method.md §5.1: an upper bound, slightly looser). The sums over terms
/// run in parallel over times, each value summed in term order (exact terms first, then the
/// compared ones). Memory: `instances × times` values ([`TERMS_BUDGET`]).
pub fn term_bounds(
    inp: &LocalInputs,
    terms: &Terms,
    whole: &Exposure,
) -> Result<TermByTerm, Unavailable> {
    let index = InstanceIndex::new(inp.instances, inp.graph.lattice().n_sites());
    let mut cache = ExposureCache::new(TERMS_BUDGET);
    term_bounds_cached(inp, terms, whole, &index, &mut cache)
}

/// The comparison for this sum, if it applies and pays ([`comparison_plan`]) and the cache
/// allows it; built once per cache.
fn comparison_of(
    inp: &LocalInputs,
    terms: &Terms,
    cache: &mut ExposureCache,
) -> Option<std::sync::Arc<Comparison>> {
    if !cache.comparison_allowed() {
        return None;
    }
    let plan = comparison_plan(inp, terms)?;
    cache.comparison(plan, inp.times)
}

/// As [`term_bounds`], with the exposures of the terms taken from `cache` (kept across
/// observables of a run: a magnetisation and a staggered magnetisation share every shape);
/// `index` must index `inp.instances`.
pub fn term_bounds_cached(
    inp: &LocalInputs,
    terms: &Terms,
    whole: &Exposure,
    index: &InstanceIndex,
    cache: &mut ExposureCache,
) -> Result<TermByTerm, Unavailable> {
    let comparison = comparison_of(inp, terms, cache);
    term_bounds_from(inp, terms, whole, comparison.as_deref(), &mut |supports| {
        cache.exposures(inp.graph, index, inp.times, supports)
    })
}

/// A source of exposures for a batch of supports, in the order given.
type ExposuresOf<'f> = dyn FnMut(&[&[usize]]) -> Vec<Result<Exposure, Unavailable>> + 'f;

/// [`term_bounds`] with the terms' exposures from `exposures_of` (a batch of supports in, their
/// exposures in the same order out), and the single-site terms whose region meets the boundary
/// bounded by `comparison` when given (docs/method.md §5, "Comparison with an interior
/// region"): their `T_{a,i}` and `C_a` are those of the comparison region, upper bounds of
/// the exact ones.
pub(super) fn term_bounds_from(
    inp: &LocalInputs,
    terms: &Terms,
    whole: &Exposure,
    comparison: Option<&Comparison>,
    exposures_of: &mut ExposuresOf,
) -> Result<TermByTerm, Unavailable> {
    // One term on the whole support with |w| s_a ≥ s_O: the third form is `|w| s_a T_i ≥ s_O
    // T_i` for every source, so the statement is exactly the whole-support one.
    if let ([support], [w], [[lo, hi]]) = (
        terms.supports.as_slice(),
        terms.weights.as_slice(),
        terms.spectra.as_slice(),
    ) {
        let mut sorted = support.clone();
        sorted.sort_unstable();
        sorted.dedup();
        if sorted == inp.support && w.abs() * (hi - lo) >= inp.s_o {
            let points = local_bounds_with(inp, whole);
            let active = inp.sources.iter().filter(|s| s.delta > 0.0).count();
            return Ok(TermByTerm {
                n_terms: 1,
                forms: vec![[0, active, 0]; points.len()],
                points,
                compared: 0,
            });
        }
    }
    let n = inp.instances.len();
    let n_t = inp.times.len();
    let values = n.saturating_mul(n_t);
    if values > TERMS_BUDGET {
        return Err(Unavailable::TermsTooLarge {
            values,
            limit: TERMS_BUDGET,
        });
    }
    // acc[k·n + i] = Σ_a |w_a| s_a T_{a,i}(t_k) over the terms whose region holds i, summed in
    // term order (deterministic); tail[k] = Σ_a |w_a| s_a C_a(t_k).
    let mut acc = vec![0.0f64; values];
    let mut tail = vec![0.0f64; n_t];
    let n_terms = terms.supports.len();
    let n_sites = inp.graph.lattice().n_sites();
    // The terms the comparison replaces (in term order) and those with an exact region.
    let mut compared: Vec<(f64, usize)> = Vec::new();
    let mut exact: Vec<usize> = Vec::with_capacity(n_terms);
    for a in 0..n_terms {
        match comparison.and_then(|cmp| Some((cmp, compared_site(cmp.plan(), terms, a, n_sites)?)))
        {
            Some((cmp, s)) => {
                let [lo, hi] = terms.spectra[a];
                compared.push((terms.weights[a].abs() * (hi - lo) * cmp.factor(), s));
            }
            None => exact.push(a),
        }
    }
    let mut start = 0;
    while start < exact.len() {
        let end = (start + TERMS_CHUNK).min(exact.len());
        let supports: Vec<&[usize]> = exact[start..end]
            .iter()
            .map(|&a| terms.supports[a].as_slice())
            .collect();
        let mut exposures = Vec::with_capacity(end - start);
        for (&a, e) in exact[start..end].iter().zip(exposures_of(&supports)) {
            let [lo, hi] = terms.spectra[a];
            let c = terms.weights[a].abs() * (hi - lo);
            let e = e?;
            if c != 0.0 {
                exposures.push((c, e));
            }
        }
        // Each time row on its own thread; within a row the terms are added in term order.
        acc.par_chunks_mut(n.max(1))
            .zip(tail.par_iter_mut())
            .enumerate()
            .for_each(|(k, (row, tk))| {
                for (c, e) in &exposures {
                    *tk += c * e.tail_per_bond(k);
                    for (src, &tt) in e.region().iter().zip(e.at(k)) {
                        row[src.instance] += c * tt;
                    }
                }
            });
        start = end;
    }
    // The compared terms: per time row (on its own thread), `T` of every site and bond from
    // the comparison table, added in term order into `by_slot`; the tail `C` of the
    // comparison region joins the exact terms' tails.
    let by_slot: Vec<f64> = match comparison {
        Some(cmp) if !compared.is_empty() => {
            let len = cmp.row_len();
            let mut rows = vec![0.0f64; len * n_t];
            rows.par_chunks_mut(len)
                .zip(tail.par_iter_mut())
                .enumerate()
                .for_each(|(k, (row, tk))| {
                    for &(c, s) in &compared {
                        *tk += c * cmp.tail_per_bond(k);
                        cmp.accumulate(k, c, s, row);
                    }
                });
            rows
        }
        _ => Vec::new(),
    };
    let n_y: Vec<f64> = inp
        .instances
        .iter()
        .map(|i| inp.graph.bonds_meeting(&i.support) as f64)
        .collect();
    // Per time (in parallel; each time on its own): the sources in instance order, then
    // reordered for the bias prefixes. The order is a strict total order (ties by instance
    // index), so it does not depend on where the sort starts.
    // Progress on a terminal only (crate::progress): times done.
    let task = crate::progress::Task::start("sums term by term: times", inp.times.len() as u64);
    let per_time: Vec<(LocalTerms, [usize; 3])> = inp
        .times
        .par_iter()
        .enumerate()
        .map(|(k, &t)| {
            let mut whole_t: Vec<f64> = n_y
                .iter()
                .map(|&ny| whole.outside(k, ny as usize))
                .collect();
            for (src, &tt) in whole.region().iter().zip(whole.at(k)) {
                whole_t[src.instance] = tt;
            }
            let mut sens = vec![0.0f64; n];
            let mut count = [0usize; 3];
            for i in 0..n {
                let g = inp.s_o * t;
                let w = inp.s_o * whole_t[i];
                let a = match comparison {
                    // The exact terms' sum, then the compared terms' (both in term order).
                    Some(cmp) if !by_slot.is_empty() => {
                        let row = &by_slot[k * cmp.row_len()..];
                        acc[k * n + i] + row[cmp.slot(i)] + n_y[i] * tail[k]
                    }
                    _ => acc[k * n + i] + n_y[i] * tail[k],
                }
                .min(f64::MAX);
                let (e, form) = if g <= w && g <= a {
                    (g, 0)
                } else if w <= a {
                    (w, 1)
                } else {
                    (a, 2)
                };
                sens[i] = e;
                if inp.sources[i].delta > 0.0 {
                    count[form] += 1;
                }
            }
            let remainder = |i: usize| {
                let s = &inp.sources[i];
                if s.delta * sens[i] > 0.0 {
                    s.delta * s.constants.sigma * sens[i]
                } else {
                    0.0
                }
            };
            let mut order: Vec<usize> = (0..n).collect();
            order.sort_by(|&x, &y| {
                remainder(y)
                    .partial_cmp(&remainder(x))
                    .unwrap_or(std::cmp::Ordering::Equal)
                    .then(x.cmp(&y))
            });
            let c = Compact {
                sources: order.iter().map(|&i| inp.sources[i]).collect(),
                pseudo: Vec::new(),
                n_region: n,
            };
            let sorted: Vec<f64> = order.iter().map(|&i| sens[i]).collect();
            let (class_of, reps) = classes(&c.sources);
            let point = point_terms(inp, t, &c, &sorted, &class_of, &reps, BiasSet::Largest);
            (point, count)
        })
        .inspect(|_| task.inc(1))
        .collect();
    drop(task);
    let (points, forms) = per_time.into_iter().unzip();
    Ok(TermByTerm {
        n_terms,
        points,
        forms,
        compared: compared.len(),
    })
}
