//! The light-cone versions of the §3 terms for one observable over all times
//! (docs/method.md §5).
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
//!
//! The files: this one holds the whole-support statement (sources compacted, merged outside
//! the region, the terms per time) and the bias over candidate sets; `term_by_term` the
//! statement of a sum of local terms; `statement` the choice between the statements.

mod statement;
mod term_by_term;

use std::collections::HashMap;

use super::global::{self, FluctuationRoute, SourceData};
use super::light_cone::{Exposure, Unavailable, WalkGraph};
use super::windows;
use crate::model::noise::{Instance, Redrawn};
use rayon::prelude::*;

pub use statement::{combine, combine_all, Statement};
pub use term_by_term::{term_bounds, term_bounds_cached, TermByTerm, COMPARISON_WORK};

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
/// statement and is taken from the global [`PointBounds`](super::global::PointBounds).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LocalTerms {
    pub e_wc: f64,
    pub e_sys: f64,
    pub e_bias: f64,
    pub bias_set: BiasSet,
    /// Fluctuation term of `E_avg` (0 when g is redrawn every shot) and its route.
    pub fluctuation: f64,
    /// The same term for static noise (see `PointBounds::fluctuation_static`).
    pub fluctuation_static: f64,
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

/// What makes two sources interchangeable in the sums: family, `δ`, `m` and correlation time.
type SourceKey = (u8, [u64; 4], u64, u64, Option<u64>);

fn key(s: &SourceData) -> SourceKey {
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
    (
        f.0,
        f.1,
        s.delta.to_bits(),
        s.systematic.to_bits(),
        s.window.map(f64::to_bits),
    )
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
    let mut index: HashMap<SourceKey, usize> = HashMap::new();
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
    // Progress on a terminal only (crate::progress): times done.
    let task = crate::progress::Task::start("local bounds: times", inp.times.len() as u64);
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
        .inspect(|_| task.inc(1))
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
            // ln φ(2tδ), or Σ_w ln φ(2δℓ_w) for a source drawn again during [0, t]
            // (docs/method.md §3, "Windows").
            let s = &c.sources[i];
            windows::ln_phi(&s.family, s.delta, s.window, t)
        })
        .collect();
    let (e_bias, bias_set) = bias(inp.s_o, c, sens, class_of, &ln_phi, prefix);
    // The sums of squares take each windowed region source's fluctuation sensitivity. A
    // pseudo-source keeps its merged linear sensitivity (the sum of its members' squares is at
    // most the square of their sum): its total may exceed s_O·t, where the greedy maximum of
    // one source no longer bounds the members' windows.
    let linear = sens;
    let sens = &*match global::fluctuation_sensitivities(&c.sources, linear, inp.s_o, t) {
        std::borrow::Cow::Owned(mut v) => {
            v[c.n_region..].copy_from_slice(&linear[c.n_region..]);
            std::borrow::Cow::Owned(v)
        }
        borrowed => borrowed,
    };
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
    let fluctuation_static = global::static_fluctuation(
        &c.sources,
        linear,
        t,
        (inp.p, inp.redrawn, inp.realizations),
        fluct,
    );
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
        fluctuation_static,
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
    let mut classes: HashMap<SourceKey, usize> = HashMap::new();
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

#[cfg(test)]
mod tests;
