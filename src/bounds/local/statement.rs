//! Which statement a point of the certificate uses: the global one, the light cone of the
//! whole support, or term by term, whichever has the smallest `E_avg` (docs/method.md §5,
//! "Global or light-cone statement").

use crate::bounds::global::PointBounds;

use super::*;

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
    p.fluctuation_static = l.fluctuation_static;
    p.route = l.route;
    p.fluctuation_one = l.fluctuation_one;
    p.route_one = l.route_one;
    p.e_one = l.e_one;
    p.e_avg = l.e_avg;
    p.half_width = l.e_avg + global.e_shot;
    (p, best.3)
}
