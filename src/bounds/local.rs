//! The light-cone versions of the §3 terms for one observable over all times (docs/method.md §5,
//! docs/method.md §5).
//!
//! Each source gets the sensitivity `e_i = s_O·T_i(t)` (at most the global `s_O·t`), and the
//! functions of [`super::global`] are reused unchanged on those sensitivities. Sources outside
//! the computed region (their `T_i` is below `10^{-30}·t` per bond they meet) are merged into
//! one *pseudo-source* per distinct source data (family, `δ`, `m`) with sensitivity
//! `s_O·Σ_i T_i`: linear sums are unchanged and sums of squares only grow
//! (`Σ x_i² ≤ (Σ x_i)²`), so every term stays an upper bound, the route that applies is the
//! same, and the work per time is proportional to the region, not to the lattice.
//!
//! The bias takes the smallest of `(s_O/2)(Π_{i∈B} φ_i(2t) − 1) + Σ_{i∉B} δ_i σ_i e_i` over `B`
//! empty, every prefix of the region sources sorted by (distance, instance), and all sources.
//!
//! How the certificate combines this with the global statement: [`combine`].

use std::collections::HashMap;

use super::family;
use super::global::{self, FluctuationRoute, PointBounds, SourceData};
use super::light_cone::{Exposure, ExposureCache, InstanceIndex, Unavailable, WalkGraph};
use crate::model::noise::{Instance, Redrawn};
use crate::model::Terms;
use rayon::prelude::*;

/// Largest number of dense term-by-term sensitivities (instances × times) computed for one
/// observable: 2^24 values, 128 MiB. Past it the term-by-term statement is not available.
pub const TERMS_BUDGET: usize = 1 << 24;

/// Number of terms whose exposures are computed together (in parallel) before they are added
/// in term order.
const TERMS_CHUNK: usize = 256;

/// Which set `B` gave the local bias.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BiasSet {
    /// No source in the product: the bias is `Σ δ_i σ_i e_i`.
    Empty,
    /// The `n` sources nearest to the support (sorted by distance, then instance index).
    Nearest(usize),
    /// Every source (the global product formula).
    All,
    /// The `n` sources with the largest `δ_i σ_i e_i` at that time (term-by-term statement;
    /// ties by instance index).
    Largest(usize),
}

/// The light-cone terms of one observable at one time. The shot term does not depend on the
/// statement and is taken from the global [`PointBounds`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LocalTerms {
    pub e_wc: f64,
    pub e_sys: f64,
    pub e_bias: f64,
    pub bias_set: BiasSet,
    /// Fluctuation term of `E_avg` (0 when g is redrawn every shot) and its route.
    pub fluctuation: f64,
    pub route: Option<FluctuationRoute>,
    /// `r(p_single)` and its route.
    pub fluctuation_one: f64,
    pub route_one: Option<FluctuationRoute>,
    pub e_one: f64,
    pub e_avg: f64,
    /// `Σ_i δ_i² σ_i² e_i²`: the Efron–Stein noise variance of one draw (docs/checks.md, before
    /// the realization rule; an upper bound).
    pub v_noise: f64,
}

/// Everything [`local_bounds`] needs for one observable.
#[derive(Debug, Clone, Copy)]
pub struct LocalInputs<'a> {
    /// The run's interaction graph with `J̃` (one per run, shared by its observables).
    pub graph: &'a WalkGraph<'a>,
    /// Sites of the observable (sorted); empty means global (then no local bounds).
    pub support: &'a [usize],
    /// `s_O`.
    pub s_o: f64,
    /// The expanded instances and their source data, in the same order.
    pub instances: &'a [Instance],
    pub sources: &'a [SourceData],
    /// The recorded times (run's unit).
    pub times: &'a [f64],
    pub redrawn: Redrawn,
    pub realizations: usize,
    /// Failure probabilities per point, exactly as for the global statement.
    pub p: f64,
    pub p_single: f64,
}

/// The compact source list of one observable: region sources, then pseudo-sources.
struct Compact {
    sources: Vec<SourceData>,
    /// For each pseudo-source: `Σ n_Y` over its members and the number of members.
    pseudo: Vec<(f64, f64)>,
    n_region: usize,
}

fn key(s: &SourceData) -> (u8, [u64; 4], u64, u64) {
    use crate::model::noise::Family::*;
    let f = match s.family {
        Uniform => (0, [0; 4]),
        Normal { sigma } => (1, [sigma.to_bits(), 0, 0, 0]),
        TruncatedNormal { sigma, cutoff } => (2, [sigma.to_bits(), cutoff.to_bits(), 0, 0]),
        TwoPoint => (3, [0; 4]),
        Bounded {
            lower,
            upper,
            std,
            symmetric,
        } => (
            4,
            [
                lower.to_bits(),
                upper.to_bits(),
                std.to_bits(),
                symmetric as u64,
            ],
        ),
    };
    (f.0, f.1, s.delta.to_bits(), s.systematic.to_bits())
}

fn compact(inp: &LocalInputs, exposure: &Exposure) -> Compact {
    let region = exposure.region();
    let mut in_region = vec![false; inp.instances.len()];
    let mut sources: Vec<SourceData> = Vec::with_capacity(region.len());
    for s in region {
        in_region[s.instance] = true;
        sources.push(inp.sources[s.instance]);
    }
    let n_region = sources.len();
    let mut index: HashMap<(u8, [u64; 4], u64, u64), usize> = HashMap::new();
    let mut pseudo: Vec<(f64, f64)> = Vec::new();
    for (k, inst) in inp.instances.iter().enumerate() {
        if in_region[k] || inp.sources[k].delta == 0.0 {
            continue;
        }
        let s = &inp.sources[k];
        let slot = *index.entry(key(s)).or_insert_with(|| {
            pseudo.push((0.0, 0.0));
            sources.push(*s);
            pseudo.len() - 1
        });
        pseudo[slot].0 += inp.graph.bonds_meeting(&inst.support) as f64;
        pseudo[slot].1 += 1.0;
    }
    Compact {
        sources,
        pseudo,
        n_region,
    }
}

/// The light-cone terms of one observable at every time, or why there are none.
pub fn local_bounds(inp: &LocalInputs) -> Result<Vec<LocalTerms>, Unavailable> {
    let exposure = Exposure::new(inp.graph, inp.support, inp.instances, inp.times)?;
    Ok(local_bounds_with(inp, &exposure))
}

/// As [`local_bounds`], from an exposure already computed for this support and these times
/// (observables with the same support share it).
pub fn local_bounds_with(inp: &LocalInputs, exposure: &Exposure) -> Vec<LocalTerms> {
    let c = compact(inp, exposure);
    let n = c.sources.len();
    // ln φ per distinct source data, recomputed per time.
    let (class_of, reps) = classes(&c.sources);
    // Each time on its own (in parallel), collected in time order.
    inp.times
        .par_iter()
        .enumerate()
        .map(|(k, &t)| {
            let mut sens = vec![0.0f64; n];
            for (e, &tt) in sens.iter_mut().zip(exposure.at(k)) {
                *e = inp.s_o * tt;
            }
            for (j, &(ny, count)) in c.pseudo.iter().enumerate() {
                let total = (ny * exposure.tail_per_bond(k)).min(count * t);
                sens[c.n_region + j] = inp.s_o * total;
            }
            point_terms(inp, t, &c, &sens, &class_of, &reps, BiasSet::Nearest)
        })
        .collect()
}

/// Every term at one time from the compact sources and their sensitivities; `prefix` names
/// the bias set of the first `n` sources.
fn point_terms(
    inp: &LocalInputs,
    t: f64,
    c: &Compact,
    sens: &[f64],
    class_of: &[usize],
    reps: &[usize],
    prefix: fn(usize) -> BiasSet,
) -> LocalTerms {
    let e_wc = global::worst_case(&c.sources, sens);
    let e_sys = global::systematic(&c.sources, sens);
    let ln_phi: Vec<f64> = reps
        .iter()
        .map(|&i| {
            let y = 2.0 * t * c.sources[i].delta;
            if y > 0.0 {
                family::ln_phi(&c.sources[i].family, y)
            } else {
                0.0
            }
        })
        .collect();
    let (e_bias, bias_set) = bias(inp.s_o, c, sens, class_of, &ln_phi, prefix);
    let one = global::fluctuation(&c.sources, sens, inp.p_single);
    let e_one = cap(inp.s_o, e_wc, e_sys + e_bias + one.value);
    let (fluct, route) = match inp.redrawn {
        Redrawn::EveryShot => (0.0, None),
        _ => {
            let r = global::fluctuation(&c.sources, sens, inp.p);
            let v =
                global::averaged_fluctuation(inp.redrawn, r.value, inp.realizations).unwrap_or(0.0);
            (v, r.route)
        }
    };
    let e_avg = cap(inp.s_o, e_wc, e_sys + e_bias + fluct);
    let mut v_noise = 0.0;
    for (s, &e) in c.sources.iter().zip(sens) {
        if s.delta * e > 0.0 {
            let x = s.delta * s.constants.sigma * e;
            v_noise += x * x;
        }
    }
    LocalTerms {
        e_wc,
        e_sys,
        e_bias,
        bias_set,
        fluctuation: fluct,
        route,
        fluctuation_one: one.value,
        route_one: one.route,
        e_one,
        e_avg,
        v_noise,
    }
}

/// Class index of each source (by distinct source data) and one representative per class.
fn classes(sources: &[SourceData]) -> (Vec<usize>, Vec<usize>) {
    let mut classes: HashMap<(u8, [u64; 4], u64, u64), usize> = HashMap::new();
    let class_of: Vec<usize> = sources
        .iter()
        .map(|s| {
            let next = classes.len();
            *classes.entry(key(s)).or_insert(next)
        })
        .collect();
    let mut reps = vec![0usize; classes.len()];
    for (i, &k) in class_of.iter().enumerate().rev() {
        reps[k] = i;
    }
    (class_of, reps)
}

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
/// [`ExposureCache`]). The sums over terms run in parallel over times, each value summed in
/// term order. Memory: `instances × times` values ([`TERMS_BUDGET`]).
pub fn term_bounds(
    inp: &LocalInputs,
    terms: &Terms,
    whole: &Exposure,
) -> Result<TermByTerm, Unavailable> {
    let index = InstanceIndex::new(inp.instances, inp.graph.lattice().n_sites());
    let mut cache = ExposureCache::new(TERMS_BUDGET);
    term_bounds_cached(inp, terms, whole, &index, &mut cache)
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
    term_bounds_from(inp, terms, whole, &mut |supports| {
        cache.exposures(inp.graph, index, inp.times, supports)
    })
}

/// A source of exposures for a batch of supports, in the order given.
type ExposuresOf<'f> = dyn FnMut(&[&[usize]]) -> Vec<Result<Exposure, Unavailable>> + 'f;

/// [`term_bounds`] with the terms' exposures from `exposures_of` (a batch of supports in, their
/// exposures in the same order out).
fn term_bounds_from(
    inp: &LocalInputs,
    terms: &Terms,
    whole: &Exposure,
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
    let mut start = 0;
    while start < n_terms {
        let end = (start + TERMS_CHUNK).min(n_terms);
        let supports: Vec<&[usize]> = terms.supports[start..end]
            .iter()
            .map(|s| s.as_slice())
            .collect();
        let mut exposures = Vec::with_capacity(end - start);
        for (a, e) in (start..end).zip(exposures_of(&supports)) {
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
    let n_y: Vec<f64> = inp
        .instances
        .iter()
        .map(|i| inp.graph.bonds_meeting(&i.support) as f64)
        .collect();
    // Per time (in parallel; each time on its own): the sources in instance order, then
    // reordered for the bias prefixes. The order is a strict total order (ties by instance
    // index), so it does not depend on where the sort starts.
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
                let a = (acc[k * n + i] + n_y[i] * tail[k]).min(f64::MAX);
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
        .collect();
    let (points, forms) = per_time.into_iter().unzip();
    Ok(TermByTerm {
        n_terms,
        points,
        forms,
    })
}

/// The smallest bias bound over the candidate sets (module header).
fn bias(
    s_o: f64,
    c: &Compact,
    sens: &[f64],
    class_of: &[usize],
    ln_phi: &[f64],
    prefix: fn(usize) -> BiasSet,
) -> (f64, BiasSet) {
    let remainder_of = |i: usize| {
        let s = &c.sources[i];
        if s.delta * sens[i] > 0.0 {
            s.delta * s.constants.sigma * sens[i]
        } else {
            0.0
        }
    };
    // Remainders of the sources after each prefix, summed from the far end (non-negative
    // terms, no cancellation): suffix[i] = Σ_{j ≥ i} δ_j σ_j e_j.
    let n = c.sources.len();
    let mut suffix = vec![0.0f64; n + 1];
    for i in (0..n).rev() {
        suffix[i] = suffix[i + 1] + remainder_of(i);
    }
    let mut best = (suffix[0], BiasSet::Empty);
    let mut ln_sum = 0.0;
    for i in 0..c.n_region {
        ln_sum += ln_phi[class_of[i]];
        let v = 0.5 * s_o * ln_sum.exp_m1() + suffix[i + 1];
        if v < best.0 {
            best = (v, prefix(i + 1));
        }
    }
    let mut all = ln_sum;
    for (j, &(_, count)) in c.pseudo.iter().enumerate() {
        all += count * ln_phi[class_of[c.n_region + j]];
    }
    let v = 0.5 * s_o * all.exp_m1();
    if v < best.0 {
        best = (v, BiasSet::All);
    }
    best
}

/// `min(s_O, E_wc, rest)`, NaN treated as ∞ (as in [`super::global`]).
fn cap(s_o: f64, e_wc: f64, rest: f64) -> f64 {
    let rest = if rest.is_nan() { f64::INFINITY } else { rest };
    s_o.min(e_wc).min(rest)
}

/// Which statement a point of the certificate uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Statement {
    Global,
    /// The light cone of the whole support.
    LightCone,
    /// The light cones term by term ([`term_bounds`]); recorded as `light_cone` in
    /// `statement_used` (it is a light-cone statement), with its form beside it.
    TermByTerm,
}

impl Statement {
    /// The spelling used in certificates.
    pub fn as_str(self) -> &'static str {
        match self {
            Statement::Global => "global",
            Statement::LightCone | Statement::TermByTerm => "light_cone",
        }
    }

    /// The form of the statement: `global`, `whole_support` or `term_by_term`.
    pub fn form(self) -> &'static str {
        match self {
            Statement::Global => "global",
            Statement::LightCone => "whole_support",
            Statement::TermByTerm => "term_by_term",
        }
    }
}

/// The point the certificate reports: the global one, or the light-cone one when its `E_avg`
/// is strictly smaller (or equal with a strictly smaller `E_1`).
///
/// "Statement" means the whole set of noise terms of one method at one (observable, time):
/// `E_wc, E_sys, E_bias`, the fluctuation terms and routes, `E_1` and `E_avg`, so that the
/// reported terms reproduce the reported `E_1` and `E_avg`. Both statements are numbers fixed
/// before the data are seen and each holds at the same failure probability, so the event for
/// the smaller one is one of the two events: no extra union bound is needed. The shot term is
/// common to both. For the consistency check take `min(global V_noise, local v_noise)`.
pub fn combine(global: &PointBounds, local: Option<&LocalTerms>) -> (PointBounds, Statement) {
    combine_all(global, local, None)
}

/// As [`combine`], with a third candidate, the term-by-term statement: the smallest `E_avg`
/// wins (ties: the smaller `E_1`; else the earlier of global, whole support, term by term).
/// Each candidate holds at the same failure probability and is fixed before the data are
/// seen, so, as in [`combine`], no extra union bound is needed.
pub fn combine_all(
    global: &PointBounds,
    local: Option<&LocalTerms>,
    terms: Option<&LocalTerms>,
) -> (PointBounds, Statement) {
    let mut best: (f64, f64, Option<&LocalTerms>, Statement) =
        (global.e_avg, global.e_one, None, Statement::Global);
    for (cand, st) in [
        (local, Statement::LightCone),
        (terms, Statement::TermByTerm),
    ] {
        let Some(l) = cand else { continue };
        if l.e_avg < best.0 || (l.e_avg == best.0 && l.e_one < best.1) {
            best = (l.e_avg, l.e_one, Some(l), st);
        }
    }
    let Some(l) = best.2 else {
        return (*global, Statement::Global);
    };
    let mut p = *global;
    p.e_wc = l.e_wc;
    p.e_sys = l.e_sys;
    p.e_bias = l.e_bias;
    p.fluctuation = l.fluctuation;
    p.route = l.route;
    p.fluctuation_one = l.fluctuation_one;
    p.route_one = l.route_one;
    p.e_one = l.e_one;
    p.e_avg = l.e_avg;
    p.half_width = l.e_avg + global.e_shot;
    (p, best.3)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::lattice::{Boundary, Geometry, Lattice};
    use crate::model::noise::Family;

    /// One uniform source per site (δ_site) and one per bond (δ_bond).
    fn instances(l: &Lattice, d_site: f64, d_bond: f64) -> Vec<Instance> {
        let mut v: Vec<Instance> = (0..l.n_sites())
            .map(|s| Instance {
                source: 0,
                support: vec![s],
                bond: None,
                delta: d_site,
                family: Family::Uniform,
                mean_offset: 0.1,
                mean_offset_uncertainty: 0.0,
            })
            .collect();
        for (e, &[a, b]) in l.bonds().iter().enumerate() {
            v.push(Instance {
                source: 1,
                support: vec![a.min(b) as usize, a.max(b) as usize],
                bond: Some(e),
                delta: d_bond,
                family: Family::TwoPoint,
                mean_offset: 0.0,
                mean_offset_uncertainty: 0.0,
            });
        }
        v
    }

    /// The inputs for an observable of spread 2 on `support` at `times`, noise redrawn every
    /// realization, failure probability `p` for both statements.
    fn inputs<'a>(
        graph: &'a WalkGraph<'a>,
        inst: &'a [Instance],
        sources: &'a [SourceData],
        support: &'a [usize],
        times: &'a [f64],
        realizations: usize,
        p: f64,
    ) -> LocalInputs<'a> {
        LocalInputs {
            graph,
            support,
            s_o: 2.0,
            instances: inst,
            sources,
            times,
            redrawn: Redrawn::EveryRealization,
            realizations,
            p,
            p_single: p,
        }
    }

    fn terms(l: &Lattice, site: usize, times: &[f64], d: f64) -> Vec<LocalTerms> {
        let inst = instances(l, d, d);
        let sources: Vec<SourceData> = inst.iter().map(SourceData::from_instance).collect();
        let graph = WalkGraph::new(l, &vec![1.0; l.n_bonds()], 1, &inst).unwrap();
        local_bounds(&inputs(&graph, &inst, &sources, &[site], times, 10, 1e-3)).unwrap()
    }

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    /// A site in the middle of chains of 1001 and 2001 sites (and square lattices of 101² and
    /// 201²): before the light cone (the computed region) reaches the boundary the local
    /// bounds do not depend on the system size.
    #[test]
    fn local_bounds_do_not_depend_on_the_system_size() {
        let cases = [
            (
                Geometry::Chain,
                vec![1001],
                vec![2001],
                vec![0.5, 1.0, 2.0, 3.0],
            ),
            (
                Geometry::Square,
                vec![101, 101],
                vec![201, 201],
                vec![0.1, 0.25, 0.5],
            ),
        ];
        for (g, small, big, times) in cases {
            let ls = Lattice::regular(g, &small, Boundary::Open).unwrap();
            let lb = Lattice::regular(g, &big, Boundary::Open).unwrap();
            let centre = |shape: &[usize]| shape.iter().fold(0, |acc, &n| acc * n + n / 2);
            let a = terms(&ls, centre(&small), &times, 0.05);
            let b = terms(&lb, centre(&big), &times, 0.05);
            for ((x, y), &t) in a.iter().zip(&b).zip(&times) {
                for (u, v) in [
                    (x.e_wc, y.e_wc),
                    (x.e_sys, y.e_sys),
                    (x.e_bias, y.e_bias),
                    (x.fluctuation, y.fluctuation),
                    (x.fluctuation_one, y.fluctuation_one),
                    (x.v_noise, y.v_noise),
                ] {
                    assert!(rel(u, v) < 1e-12, "{g:?} t={t}: {u} vs {v} ({x:?})");
                }
                // And the global worst case does grow with the size: locality matters here.
                let global_wc =
                    2.0 * t * (0.055 * ls.n_sites() as f64 + 0.05 * ls.n_bonds() as f64);
                assert!(x.e_wc < 0.1 * global_wc, "{} vs global {global_wc}", x.e_wc);
            }
        }
    }

    /// Least-squares slope of log y against log x.
    fn slope(xs: &[f64], ys: &[f64]) -> f64 {
        let n = xs.len() as f64;
        let lx: Vec<f64> = xs.iter().map(|x| x.ln()).collect();
        let ly: Vec<f64> = ys.iter().map(|y| y.ln()).collect();
        let mx = lx.iter().sum::<f64>() / n;
        let my = ly.iter().sum::<f64>() / n;
        let (mut sxy, mut sxx) = (0.0, 0.0);
        for (x, y) in lx.iter().zip(&ly) {
            sxy += (x - mx) * (y - my);
            sxx += (x - mx) * (x - mx);
        }
        sxy / sxx
    }

    /// Inside the system the fluctuation term grows like t^(d/2+1) and the worst case like
    /// t^(d+1) (docs/method.md §5); fitted over a window where the light cone is far from the edge.
    #[test]
    fn local_terms_scale_with_the_dimension() {
        let cases = [
            (Geometry::Chain, vec![4001], 2000, 1.0, (10.0f64, 20.0f64)),
            (
                Geometry::Square,
                vec![451, 451],
                225 * 451 + 225,
                2.0,
                (2.0, 4.0),
            ),
        ];
        for (g, shape, centre, d, (t0, t1)) in cases {
            let l = Lattice::regular(g, &shape, Boundary::Open).unwrap();
            let times: Vec<f64> = (0..6)
                .map(|k| t0 * (t1 / t0).powf(k as f64 / 5.0))
                .collect();
            let out = terms(&l, centre, &times, 1e-4);
            let fl: Vec<f64> = out.iter().map(|x| x.fluctuation).collect();
            let wc: Vec<f64> = out.iter().map(|x| x.e_wc).collect();
            let (sf, sw) = (slope(&times, &fl), slope(&times, &wc));
            assert!(
                (sf - (d / 2.0 + 1.0)).abs() < 0.15,
                "{g:?}: fluctuation slope {sf}"
            );
            assert!(
                (sw - (d + 1.0)).abs() < 0.15,
                "{g:?}: worst-case slope {sw}"
            );
        }
    }

    /// `(1/n) Σ_i Y_i` on `n` uncoupled sites (bond norms 0), one uniform Z source per site:
    /// term by term `E_i = (2/n)·t`, so the fluctuation `∝ √(Σ E_i²)` falls like `n^{-1/2}`;
    /// the whole operator has `E_i = 2t` and grows like `n^{1/2}` (docs/method.md §5). Fitted over
    /// n = 10 … 10^4.
    fn averaged(n: usize, times: &[f64]) -> (Vec<LocalTerms>, TermByTerm) {
        let l = Lattice::regular(Geometry::Chain, &[n], Boundary::Open).unwrap();
        let inst: Vec<Instance> = instances(&l, 0.01, 0.0)
            .into_iter()
            .filter(|i| i.bond.is_none())
            .collect();
        let sources: Vec<SourceData> = inst.iter().map(SourceData::from_instance).collect();
        let graph = WalkGraph::new(&l, &vec![0.0; l.n_bonds()], 1, &inst).unwrap();
        let support: Vec<usize> = (0..n).collect();
        let inp = inputs(&graph, &inst, &sources, &support, times, 10, 1e-3);
        let terms = Terms {
            supports: (0..n).map(|i| vec![i]).collect(),
            weights: vec![1.0 / n as f64; n],
            spectra: vec![[-1.0, 1.0]; n],
        };
        let whole = Exposure::new(&graph, &support, &inst, times).unwrap();
        let by_term = term_bounds(&inp, &terms, &whole).unwrap();
        (local_bounds_with(&inp, &whole), by_term)
    }

    #[test]
    fn an_average_of_n_uncoupled_terms_fluctuates_like_one_over_root_n() {
        let ns = [10usize, 100, 1000, 10_000];
        let times = [0.5, 1.0];
        let (mut whole, mut terms) = (Vec::new(), Vec::new());
        for &n in &ns {
            let (w, t) = averaged(n, &times);
            assert_eq!(t.n_terms, n);
            // Every source took the term-by-term form at t > 0.
            assert_eq!(t.forms[1], [0, 0, n]);
            whole.push(w[1].fluctuation);
            terms.push(t.points[1].fluctuation);
            // Never above the whole-support statement.
            assert!(t.points[1].e_avg <= w[1].e_avg);
        }
        let xs: Vec<f64> = ns.iter().map(|&n| n as f64).collect();
        let (st, sw) = (slope(&xs, &terms), slope(&xs, &whole));
        assert!((st + 0.5).abs() < 0.05, "term-by-term exponent {st}");
        assert!((sw - 0.5).abs() < 0.05, "whole-operator exponent {sw}");
    }

    /// The term-by-term statement with exposures reused across translated terms equals the
    /// one with a fresh exposure per term, to the last bit (uniform open chain and square
    /// lattice, staggered weights and nearest-pair terms), and does not depend on the number
    /// of threads.
    #[test]
    fn reused_term_exposures_give_the_same_bits_as_fresh_ones() {
        for (g, shape, times) in [
            (Geometry::Chain, vec![400], vec![0.0, 0.5, 1.5]),
            (Geometry::Square, vec![50, 50], vec![0.0, 0.01, 0.02]),
        ] {
            let l = Lattice::regular(g, &shape, Boundary::Open).unwrap();
            let n = l.n_sites();
            let inst = instances(&l, 0.05, 0.02);
            let sources: Vec<SourceData> = inst.iter().map(SourceData::from_instance).collect();
            let graph = WalkGraph::new(&l, &vec![1.0; l.n_bonds()], 1, &inst).unwrap();
            let support: Vec<usize> = (0..n).collect();
            let inp = inputs(&graph, &inst, &sources, &support, &times, 10, 1e-3);
            let whole = Exposure::new(&graph, &support, &inst, &times).unwrap();
            // Every site of the chain; the middle row of the square lattice (kept short).
            let row: Vec<usize> = if g == Geometry::Square {
                (0..50).map(|y| 25 * 50 + y).collect()
            } else {
                (0..n).collect()
            };
            let mut supports: Vec<Vec<usize>> = row.iter().map(|&s| vec![s]).collect();
            supports.extend(row.windows(2).map(|w| w.to_vec()));
            let m = supports.len();
            let terms = Terms {
                supports,
                weights: (0..m)
                    .map(|a| if a % 2 == 0 { 1.0 } else { -0.5 } / n as f64)
                    .collect(),
                spectra: vec![[-1.0, 1.0]; m],
            };
            let reused = term_bounds(&inp, &terms, &whole).unwrap();
            let fresh = term_bounds_from(&inp, &terms, &whole, &mut |batch| {
                batch
                    .iter()
                    .map(|x| Exposure::new(&graph, x, &inst, &times))
                    .collect()
            })
            .unwrap();
            assert_eq!(format!("{reused:?}"), format!("{fresh:?}"), "{g:?}");
            let one = rayon::ThreadPoolBuilder::new()
                .num_threads(1)
                .build()
                .unwrap()
                .install(|| term_bounds(&inp, &terms, &whole).unwrap());
            assert_eq!(
                format!("{reused:?}"),
                format!("{one:?}"),
                "{g:?} one thread"
            );
            // Reuse happened: far fewer shapes than terms.
            let index = InstanceIndex::new(&inst, n);
            let mut cache = ExposureCache::new(TERMS_BUDGET);
            term_bounds_cached(&inp, &terms, &whole, &index, &mut cache).unwrap();
            let (computed, again) = cache.counts();
            let wanted = if g == Geometry::Square { 10 } else { m / 2 };
            assert!(again > wanted, "{g:?}: {computed} computed, {again} reused");
        }
    }

    /// A sum with one term, `w = 1` and the observable's spectrum, on the observable's
    /// support: exactly the whole-support light-cone statement, and [`combine_all`] keeps it.
    #[test]
    fn a_single_term_gives_exactly_the_light_cone_statement_of_that_term() {
        let l = Lattice::regular(Geometry::Chain, &[41], Boundary::Open).unwrap();
        let inst = instances(&l, 0.05, 0.02);
        let sources: Vec<SourceData> = inst.iter().map(SourceData::from_instance).collect();
        let graph = WalkGraph::new(&l, &vec![1.0; l.n_bonds()], 1, &inst).unwrap();
        let times = [0.0, 0.3, 1.0, 2.0];
        let support = [20usize, 21];
        let inp = inputs(&graph, &inst, &sources, &support, &times, 5, 1e-3);
        let whole = Exposure::new(&graph, &support, &inst, &times).unwrap();
        let local = local_bounds_with(&inp, &whole);
        let terms = Terms {
            supports: vec![vec![21, 20]],
            weights: vec![1.0],
            spectra: vec![[-1.0, 1.0]],
        };
        let t = term_bounds(&inp, &terms, &whole).unwrap();
        assert_eq!(t.points, local);
        let inf = f64::INFINITY;
        let global = PointBounds {
            e_wc: inf,
            e_sys: 0.0,
            e_bias: 0.0,
            fluctuation: inf,
            route: None,
            fluctuation_one: inf,
            route_one: None,
            e_one: inf,
            e_avg: inf,
            e_shot: 0.0,
            shot_approximate: false,
            half_width: inf,
        };
        for (a, b) in local.iter().zip(&t.points) {
            let (p, st) = combine_all(&global, Some(a), Some(b));
            assert_eq!(st, Statement::LightCone);
            assert_eq!(p.e_avg, a.e_avg);
        }
    }

    /// Exact evolution (the crate's Chebyshev propagator, exact to 1e-10 in the state's norm):
    /// an 8-site XXZ chain (J = 1, Δ = 0.5, so J̃ = 2 + bond noise) with a uniform Z source on
    /// every site and a two-point ZZ source on every bond, O = Z_0, ψ = |+⟩^8. Changing one
    /// far source's g_i from −1 to +1 moves f by at most 2 δ_i s_O T_i(t) (the Lipschitz bound
    /// behind every local term), and whole draws stay within the local worst case.
    #[test]
    fn local_bounds_hold_on_exact_evolutions() {
        use crate::simulate::hamiltonian::{Operator, PauliSum};
        use crate::simulate::pauli::PauliString;
        use crate::simulate::propagate::{evolve, Workspace, DEFAULT_TOLERANCE};
        use num_complex::Complex64;
        use rand::{Rng, SeedableRng};

        let n = 8;
        let l = Lattice::regular(Geometry::Chain, &[n], Boundary::Open).unwrap();
        let (d_site, d_bond) = (0.3, 0.05);
        let inst = instances(&l, d_site, d_bond);
        let sources: Vec<SourceData> = inst.iter().map(SourceData::from_instance).collect();
        let graph = WalkGraph::new(&l, &vec![2.0; l.n_bonds()], 1, &inst).unwrap();
        let times = [0.2, 0.4, 0.7];
        let exposure = Exposure::new(&graph, &[0], &inst, &times).unwrap();
        let local = local_bounds(&inputs(&graph, &inst, &sources, &[0], &times, 1, 0.01)).unwrap();
        // f(g) at time t: offsets μ = 0.1 on the site sources are part of H(g).
        let f = |g: &[f64], t: f64| -> f64 {
            let mut hz = vec![0.0; n];
            for s in 0..n {
                hz[s] = d_site * (0.1 + g[s]);
            }
            let mut h = PauliSum::xxz(l.bonds(), &vec![1.0; l.n_bonds()], 0.5, &vec![0.0; n], &hz);
            for (e, &[a, b]) in l.bonds().iter().enumerate() {
                let zz = PauliString::from_letters("ZZ", &[a as usize, b as usize]).unwrap();
                h.add(zz, d_bond * g[n + e]);
            }
            let op = Operator::compile(&h, n);
            let amp = Complex64::new((1.0 / (1u64 << n) as f64).sqrt(), 0.0);
            let mut psi = vec![amp; 1 << n];
            let mut work = Workspace::default();
            evolve(&op, &mut psi, t, DEFAULT_TOLERANCE, &mut work);
            PauliString::single('Z', 0).unwrap().expectation(&psi)
        };
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let n_src = inst.len();
        let mut checked = 0;
        for (k, &t) in times.iter().enumerate() {
            for _ in 0..3 {
                let g: Vec<f64> = (0..n_src)
                    .map(|i| {
                        if i < n {
                            rng.random_range(-1.0..1.0)
                        } else if rng.random::<bool>() {
                            1.0
                        } else {
                            -1.0
                        }
                    })
                    .collect();
                // Whole draws against the local worst case (probability one).
                let zero = vec![0.0; n_src];
                let mut g0 = zero.clone();
                g0[..n].fill(-0.1); // μ + g = 0 on the site sources: the ideal H.
                let dev = (f(&g, t) - f(&g0, t)).abs();
                assert!(
                    dev <= local[k].e_wc + 1e-8,
                    "t={t}: {dev} > {}",
                    local[k].e_wc
                );
                // One far site source at a time.
                for (j, src) in exposure.region().iter().enumerate() {
                    if src.instance < 3 || src.instance >= n {
                        continue;
                    }
                    let (mut gp, mut gm) = (g.clone(), g.clone());
                    gp[src.instance] = 1.0;
                    gm[src.instance] = -1.0;
                    let diff = (f(&gp, t) - f(&gm, t)).abs();
                    let bound = 2.0 * d_site * 2.0 * exposure.at(k)[j];
                    assert!(
                        diff <= bound * (1.0 + 1e-9) + 1e-8,
                        "site {} t={t}: {diff} > {bound}",
                        src.instance
                    );
                    assert!(
                        exposure.at(k)[j] < t,
                        "a far source is exposed for less than t"
                    );
                    checked += 1;
                }
            }
        }
        assert_eq!(checked, 3 * 3 * 5);
    }
}
