//! Property tests (proptest) of the bounds and of canonical JSON (issue #7, item 3).
//!
//! Why this exists: the unit tests check the bounds at hand-picked points against closed forms
//! and exact simulations; these properties check, over randomly drawn noise records (every
//! family, amplitudes over many decades, one to a dozen sources, every redraw mode, mixed
//! records), times and confidence levels, the structural facts that docs/method.md §3–§5 and
//! docs/budget.md rely on: every bound is non-negative and not NaN (finite where a bound is
//! capped), no bound falls when an amplitude, the time or the set of sources grows, `E_avg ≤ E_1` at equal
//! failure probability, a stricter confidence never gives a smaller bound, and the light-cone
//! statement never exceeds the global one over the same sources. The planning bisection
//! (docs/budget.md) is only correct if the monotonicity holds.
//!
//! The reference is the mathematics of docs/method.md (each property says which step); the
//! comparisons are exact (no tolerance) unless a comment says why one is needed. Canonical
//! JSON is checked for idempotence (RFC 8785: the canonical form of a parsed canonical form is
//! the same bytes). The library API only: pure functions, no files.
//!
//! Lean: 64–128 cases per property; the whole module runs in a few seconds in the (opt-level 3)
//! test profile.

use proptest::prelude::*;
use proptest::test_runner::TestCaseError;
use serde_json::Value;

use quassay::bounds::confidence::{self, Simultaneity};
use quassay::bounds::fidelity::fidelity_bound;
use quassay::bounds::global::{
    self, evaluate_point, PointBounds, PointInputs, ShotData, SourceData,
};
use quassay::bounds::light_cone::WalkGraph;
use quassay::bounds::local::{local_bounds, LocalInputs};
use quassay::certificate::canonical::to_canonical_bytes;
use quassay::model::lattice::{Boundary, Geometry, Lattice};
use quassay::model::noise::{Family, Instance, Redrawn};

// ---------------------------------------------------------------------------------------------
// Strategies
// ---------------------------------------------------------------------------------------------

/// `10^x` for `x` uniform in `[lo, hi]`: amplitudes, times and probabilities over decades.
fn log_uniform(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
    (lo..=hi).prop_map(|x| 10f64.powf(x))
}

/// Every family of docs/method.md §2 with parameters as the noise-record reader accepts them
/// (sigma, cutoff > 0; lower ≤ 0 ≤ upper; std ≤ √(−lower·upper); symmetric ⇒ lower = −upper).
fn family() -> impl Strategy<Value = Family> {
    prop_oneof![
        Just(Family::Uniform),
        log_uniform(-2.0, 0.7).prop_map(|sigma| Family::Normal { sigma }),
        (log_uniform(-2.0, 0.7), log_uniform(-2.0, 0.8))
            .prop_map(|(sigma, cutoff)| Family::TruncatedNormal { sigma, cutoff }),
        Just(Family::TwoPoint),
        bounded_family(),
    ]
}

/// The `bounded` family only (bounded support, no κ): the families allowed on bonds, with
/// uniform, truncated normal and two-point.
fn bounded_family() -> impl Strategy<Value = Family> {
    (0.05f64..3.0, 0.05f64..3.0, 0.0f64..=1.0, any::<bool>()).prop_map(|(l, u, frac, symmetric)| {
        let (lower, upper) = if symmetric { (-u, u) } else { (-l, u) };
        Family::Bounded {
            lower,
            upper,
            std: frac * (-lower * upper).sqrt(),
            symmetric,
        }
    })
}

/// A family with finite `b` (allowed on a bond of the light-cone graph).
fn finite_family() -> impl Strategy<Value = Family> {
    prop_oneof![
        Just(Family::Uniform),
        (log_uniform(-2.0, 0.7), log_uniform(-2.0, 0.8))
            .prop_map(|(sigma, cutoff)| Family::TruncatedNormal { sigma, cutoff }),
        Just(Family::TwoPoint),
        bounded_family(),
    ]
}

/// `δ_i` (sometimes exactly 0, which must neither count nor block a route) and `m_i`
/// (sometimes exactly 0).
fn delta() -> impl Strategy<Value = f64> {
    prop_oneof![1 => Just(0.0), 9 => log_uniform(-6.0, 0.5)]
}

fn systematic() -> impl Strategy<Value = f64> {
    prop_oneof![1 => Just(0.0), 1 => 0.0f64..1.0]
}

fn source_from(f: Family, delta: f64, m: f64) -> SourceData {
    SourceData {
        family: f,
        constants: quassay::bounds::family::constants(&f),
        delta,
        systematic: m,
        window: None,
    }
}

fn source() -> impl Strategy<Value = SourceData> {
    (family(), delta(), systematic()).prop_map(|(f, d, m)| source_from(f, d, m))
}

/// A noise record of 1–12 expanded sources, families mixed freely.
fn sources() -> impl Strategy<Value = Vec<SourceData>> {
    prop::collection::vec(source(), 1..=12)
}

fn redrawn() -> impl Strategy<Value = Redrawn> {
    prop_oneof![
        Just(Redrawn::EveryShot),
        Just(Redrawn::EveryRealization),
        Just(Redrawn::Once)
    ]
}

/// Times in the run's unit: 0 and 10⁻⁴…10².
fn time() -> impl Strategy<Value = f64> {
    prop_oneof![1 => Just(0.0), 9 => log_uniform(-4.0, 2.0)]
}

/// A failure probability per point (after Bonferroni): 10⁻¹²…0.5.
fn probability() -> impl Strategy<Value = f64> {
    log_uniform(-12.0, -0.3)
}

/// Shot information: counts (1…10⁵ per realization) or standard errors.
#[derive(Debug, Clone)]
enum Shots {
    Counts(Vec<u64>),
    StdErr(Vec<f64>),
}

impl Shots {
    fn data(&self) -> ShotData<'_> {
        match self {
            Shots::Counts(c) => ShotData::Counts(c),
            Shots::StdErr(s) => ShotData::StdErr(s),
        }
    }
    fn len(&self) -> usize {
        match self {
            Shots::Counts(c) => c.len(),
            Shots::StdErr(s) => s.len(),
        }
    }
}

fn shots() -> impl Strategy<Value = Shots> {
    prop_oneof![
        3 => prop::collection::vec(1u64..100_000, 1..=8).prop_map(Shots::Counts),
        1 => prop::collection::vec(0.0f64..0.5, 1..=8).prop_map(Shots::StdErr),
    ]
}

/// One (time, observable) point apart from its sources.
#[derive(Debug, Clone)]
struct Point {
    s_o: f64,
    t: f64,
    redrawn: Redrawn,
    shots: Shots,
    p: f64,
    alpha: f64,
    p_single: f64,
}

fn point() -> impl Strategy<Value = Point> {
    (
        0.25f64..4.0,
        time(),
        redrawn(),
        shots(),
        probability(),
        probability(),
        probability(),
    )
        .prop_map(|(s_o, t, redrawn, shots, p, alpha, p_single)| Point {
            s_o,
            t,
            redrawn,
            shots,
            p,
            alpha,
            p_single,
        })
}

fn evaluate(src: &[SourceData], pt: &Point) -> PointBounds {
    evaluate_point(&PointInputs {
        s_o: pt.s_o,
        t: pt.t,
        sources: src,
        sensitivities: None,
        redrawn: pt.redrawn,
        realizations: pt.shots.len(),
        shots: pt.shots.data(),
        p: pt.p,
        alpha: pt.alpha,
        p_single: pt.p_single,
    })
}

// ---------------------------------------------------------------------------------------------
// What is compared
// ---------------------------------------------------------------------------------------------

/// Every bound of one point, by name: the §3 terms, each fluctuation route on its own (where
/// it applies; at `p_single`, which is never 0, while the split gives `p = 0` when there is no
/// fluctuation term), and the fidelity deficit `1 − F_low` (§4, at `p_single`).
fn all_bounds(src: &[SourceData], pt: &Point) -> Vec<(&'static str, Option<f64>)> {
    let b = evaluate(src, pt);
    let sens = global::global_sensitivities(src.len(), pt.s_o, pt.t);
    let f = fidelity_bound(src, pt.t, pt.p_single);
    vec![
        ("E_wc", Some(b.e_wc)),
        ("E_sys", Some(b.e_sys)),
        ("E_bias", Some(b.e_bias)),
        ("fluctuation of E_avg", Some(b.fluctuation)),
        ("fluctuation of E_1", Some(b.fluctuation_one)),
        ("E_1", Some(b.e_one)),
        ("E_avg", Some(b.e_avg)),
        ("E_shot", Some(b.e_shot)),
        ("half-width", Some(b.half_width)),
        ("route G", global::route_gaussian(src, &sens, pt.p_single)),
        (
            "route D",
            global::route_bounded_differences(src, &sens, pt.p_single),
        ),
        ("route mixed", global::route_mixed(src, &sens, pt.p_single)),
        ("D_p", Some(f.d_p)),
        ("D_wc", Some(f.d_wc)),
        ("1 - F_low", Some(1.0 - f.f_low)),
    ]
}

/// `before ≤ after` for every bound both sides have (a route may apply on one side only).
fn non_decreasing(
    before: &[(&'static str, Option<f64>)],
    after: &[(&'static str, Option<f64>)],
    what: &str,
) -> Result<(), TestCaseError> {
    for ((name, a), (_, b)) in before.iter().zip(after) {
        if let (Some(a), Some(b)) = (a, b) {
            prop_assert!(a <= b, "{} fell when {}: {:e} -> {:e}", name, what, a, b);
        }
    }
    Ok(())
}

fn config(cases: u32) -> ProptestConfig {
    ProptestConfig {
        cases,
        ..ProptestConfig::default()
    }
}

// ---------------------------------------------------------------------------------------------
// Global bounds (docs/method.md §3, §4)
// ---------------------------------------------------------------------------------------------

proptest! {
    #![proptest_config(config(256))]

    /// Every term is ≥ 0 and never NaN; `E_1`, `E_avg` are capped at `s_O` (§3, the `min`);
    /// `E_wc` is infinite only with an active unbounded source; a fluctuation term is infinite
    /// only when no route applies (never, for the families of §2: each has a κ or a finite
    /// width); the shot term is finite; the fidelity bound is in [0, 1] and vacuous exactly
    /// when `min(D_p, D_wc) > √2` (§4).
    #[test]
    fn every_bound_is_non_negative_and_finite_or_capped(src in sources(), pt in point()) {
        let b = evaluate(&src, &pt);
        for (name, v) in all_bounds(&src, &pt) {
            if let Some(v) = v {
                prop_assert!(v >= 0.0, "{} = {:e} is negative or NaN", name, v);
            }
        }
        prop_assert!(b.e_one <= pt.s_o && b.e_avg <= pt.s_o);
        prop_assert!(b.e_one <= b.e_wc && b.e_avg <= b.e_wc);
        let unbounded = src.iter().any(|s| s.delta > 0.0 && !s.constants.b.is_finite());
        prop_assert_eq!(b.e_wc.is_infinite(), unbounded && pt.t > 0.0);
        prop_assert!(b.e_sys.is_finite());
        prop_assert!(b.fluctuation.is_finite() && b.fluctuation_one.is_finite());
        prop_assert!(b.e_shot.is_finite() && b.half_width.is_finite());
        prop_assert_eq!(b.half_width, b.e_avg + b.e_shot);
        prop_assert_eq!(b.route.is_none(), pt.redrawn == Redrawn::EveryShot);
        if pt.redrawn == Redrawn::EveryShot {
            prop_assert_eq!(b.fluctuation, 0.0);
        }
        let f = fidelity_bound(&src, pt.t, pt.p_single);
        prop_assert!((0.0..=1.0).contains(&f.f_low));
        prop_assert_eq!(f.vacuous, f.d > std::f64::consts::SQRT_2);
        prop_assert_eq!(f.d, f.d_p.min(f.d_wc));
        if pt.t == 0.0 {
            prop_assert_eq!(f.f_low, 1.0);
            prop_assert_eq!(b.e_avg, 0.0);
        }
    }

    /// Raising one amplitude `δ_j` by a factor ≥ 1 (from 0 too), or all of them, never lowers
    /// a bound: every term is a sum or product of non-decreasing functions of `δ_i` (§3, §4).
    #[test]
    fn no_bound_falls_when_an_amplitude_grows(
        src in sources(),
        pt in point(),
        pick in any::<prop::sample::Index>(),
        factor in 1.0f64..8.0,
        fresh in log_uniform(-6.0, 0.0),
        all in any::<bool>(),
    ) {
        let mut louder = src.clone();
        if all {
            for s in &mut louder {
                s.delta *= factor;
            }
        } else {
            let j = pick.index(src.len());
            louder[j].delta = if src[j].delta == 0.0 { fresh } else { src[j].delta * factor };
        }
        non_decreasing(&all_bounds(&src, &pt), &all_bounds(&louder, &pt), "an amplitude grew")?;
    }

    /// A larger systematic offset `m_j` never lowers a bound (`E_wc`, `E_sys`, `D` are
    /// increasing in `m_i`, nothing else depends on it).
    #[test]
    fn no_bound_falls_when_an_offset_grows(
        src in sources(),
        pt in point(),
        pick in any::<prop::sample::Index>(),
        extra in 0.0f64..1.0,
    ) {
        let mut biased = src.clone();
        let j = pick.index(src.len());
        biased[j].systematic += extra;
        non_decreasing(&all_bounds(&src, &pt), &all_bounds(&biased, &pt), "an offset grew")?;
    }

    /// A later time never lowers a bound (every term is `t·(…)` or `φ(2tδ)`, §3).
    #[test]
    fn no_bound_falls_when_time_grows(
        src in sources(),
        pt in point(),
        factor in 1.0f64..8.0,
        from_zero in log_uniform(-4.0, 1.0),
    ) {
        let mut later = pt.clone();
        later.t = if pt.t == 0.0 { from_zero } else { pt.t * factor };
        non_decreasing(&all_bounds(&src, &pt), &all_bounds(&src, &later), "t grew")?;
    }

    /// Adding a source anywhere in the record never lowers a bound (§3: every sum gains a
    /// non-negative term, every product a factor φ ≥ 1; §7 relies on it).
    #[test]
    fn adding_a_source_never_lowers_a_bound(
        src in sources(),
        pt in point(),
        extra in source(),
        at in any::<prop::sample::Index>(),
    ) {
        let mut more = src.clone();
        more.insert(at.index(src.len() + 1), extra);
        non_decreasing(&all_bounds(&src, &pt), &all_bounds(&more, &pt), "a source was added")?;
    }

    /// `E_avg ≤ E_1` at equal failure probability: the averaged term is `0`, `r/√R` or `r`
    /// against `r` for one evolution (§3 table). With the default split `E_1` is evaluated at
    /// all of ε and `E_avg` at ε/2, so the comparison is made at one `p`, and with the split
    /// itself where the noise is redrawn every shot (no fluctuation term).
    #[test]
    fn e_avg_never_exceeds_e_one(src in sources(), pt in point(), confidence in 0.5f64..0.999_999) {
        let same = Point { p_single: pt.p, ..pt.clone() };
        let b = evaluate(&src, &same);
        prop_assert!(b.e_avg <= b.e_one, "E_avg {:e} > E_1 {:e}", b.e_avg, b.e_one);
        let split = confidence::split(confidence, false, true, 1, Simultaneity::Pointwise).unwrap();
        let every_shot = Point {
            redrawn: Redrawn::EveryShot,
            p: split.p_point,
            alpha: split.alpha_point,
            p_single: split.p_single_point,
            ..pt
        };
        let b = evaluate(&src, &every_shot);
        prop_assert!(b.e_avg <= b.e_one, "every shot: E_avg {:e} > E_1 {:e}", b.e_avg, b.e_one);
    }

    /// A stricter confidence level never gives a smaller bound: the split (§3, "The claim")
    /// gives smaller per-point failure probabilities, and every term is non-increasing in them.
    #[test]
    fn a_stricter_confidence_never_gives_a_smaller_bound(
        src in sources(),
        pt in point(),
        c1 in 0.5f64..0.999_999,
        stricter in 0.0f64..=1.0,
        points in 1usize..2000,
        simultaneous in any::<bool>(),
    ) {
        let c2 = c1 + stricter * (0.999_999_9 - c1);
        let simultaneity =
            if simultaneous { Simultaneity::Simultaneous } else { Simultaneity::Pointwise };
        let fluct = confidence::has_fluctuation_term(pt.redrawn);
        let at = |c: f64| {
            let s = confidence::split(c, fluct, true, points, simultaneity).unwrap();
            Point { p: s.p_point, alpha: s.alpha_point, p_single: s.p_single_point, ..pt.clone() }
        };
        let (loose, strict) = (at(c1), at(c2));
        prop_assert!(strict.p <= loose.p && strict.alpha <= loose.alpha);
        prop_assert!(strict.p_single <= loose.p_single);
        non_decreasing(
            &all_bounds(&src, &loose),
            &all_bounds(&src, &strict),
            "the confidence rose",
        )?;
    }
}

// ---------------------------------------------------------------------------------------------
// Light cone (docs/method.md §5)
// ---------------------------------------------------------------------------------------------

/// A small lattice (chains of 2–50 sites, squares up to 7×7, open or periodic), its target
/// bond norms, the noise instances (per site any family, per bond a bounded family, as §5
/// requires), the observable's support (a site or a bond) and a few times.
#[derive(Debug, Clone)]
struct Cone {
    lattice: Lattice,
    bond_norms: Vec<f64>,
    instances: Vec<Instance>,
    support: Vec<usize>,
    times: Vec<f64>,
}

fn lattice() -> impl Strategy<Value = Lattice> {
    prop_oneof![
        (2usize..=50, any::<bool>()).prop_map(|(n, periodic)| {
            let b = if periodic && n >= 3 {
                Boundary::Periodic
            } else {
                Boundary::Open
            };
            Lattice::regular(Geometry::Chain, &[n], b).unwrap()
        }),
        (2usize..=7, 2usize..=7, any::<bool>()).prop_map(|(a, b, periodic)| {
            let bc = if periodic && a >= 3 && b >= 3 {
                Boundary::Periodic
            } else {
                Boundary::Open
            };
            Lattice::regular(Geometry::Square, &[a, b], bc).unwrap()
        }),
    ]
}

/// One record-level source: family, amplitude, offset, uncertainty, and whether it acts on
/// bonds (then its family is bounded).
fn cone_source() -> impl Strategy<Value = (bool, Family, f64, f64, f64)> {
    prop_oneof![
        (Just(false), family(), delta(), -0.5f64..0.5, 0.0f64..0.5),
        (
            Just(true),
            finite_family(),
            delta(),
            -0.5f64..0.5,
            0.0f64..0.5
        ),
    ]
}

fn cone() -> impl Strategy<Value = Cone> {
    (
        lattice(),
        prop::collection::vec(cone_source(), 1..=3),
        0.0f64..1.5,
        any::<prop::sample::Index>(),
        any::<bool>(),
        prop::collection::vec(0.0f64..3.0, 1..=4),
    )
        .prop_map(|(lattice, record, j, at, on_bond, mut times)| {
            let bond_norms = vec![j; lattice.n_bonds()];
            let mut instances = Vec::new();
            for (k, &(bond, family, delta, mu, u)) in record.iter().enumerate() {
                let inst = |support: Vec<usize>, bond: Option<usize>| Instance {
                    source: k,
                    support,
                    bond,
                    delta,
                    family,
                    mean_offset: mu,
                    mean_offset_uncertainty: u,
                    correlation_time: None,
                };
                if bond {
                    for (e, &[a, b]) in lattice.bonds().iter().enumerate() {
                        instances.push(inst(vec![a as usize, b as usize], Some(e)));
                    }
                } else {
                    for s in 0..lattice.n_sites() {
                        instances.push(inst(vec![s], None));
                    }
                }
            }
            let support = if on_bond {
                let [a, b] = lattice.bonds()[at.index(lattice.n_bonds())];
                let mut v = vec![a as usize, b as usize];
                v.sort_unstable();
                v
            } else {
                vec![at.index(lattice.n_sites())]
            };
            times.sort_by(f64::total_cmp);
            Cone {
                lattice,
                bond_norms,
                instances,
                support,
                times,
            }
        })
}

proptest! {
    #![proptest_config(config(64))]

    /// The light-cone statement uses sensitivities `s_O·T_i(t) ≤ s_O·t` in the same formulas
    /// (§5), and its bias takes the global product as one candidate: over the same sources,
    /// every local term is at most the global one. It is also non-negative, capped at `s_O`,
    /// and non-decreasing in t (`T_i(t)` is).
    #[test]
    fn the_light_cone_statement_never_exceeds_the_global_one(
        c in cone(),
        s_o in 0.5f64..4.0,
        redrawn in redrawn(),
        realizations in 1usize..=8,
        p in probability(),
        p_single in probability(),
    ) {
        let graph = WalkGraph::new(&c.lattice, &c.bond_norms, 1, &c.instances).unwrap();
        let sources: Vec<SourceData> = c.instances.iter().map(SourceData::from_instance).collect();
        let local = local_bounds(&LocalInputs {
            graph: &graph,
            support: &c.support,
            s_o,
            instances: &c.instances,
            sources: &sources,
            times: &c.times,
            redrawn,
            realizations,
            p,
            p_single,
        })
        .unwrap();
        prop_assert_eq!(local.len(), c.times.len());
        let shots = vec![1000u64; realizations];
        let mut last: Option<quassay::bounds::local::LocalTerms> = None;
        for (l, &t) in local.iter().zip(&c.times) {
            let g = evaluate_point(&PointInputs {
                s_o,
                t,
                sources: &sources,
                sensitivities: None,
                redrawn,
                realizations,
                shots: ShotData::Counts(&shots),
                p,
                alpha: p,
                p_single,
            });
            // Tolerance: rounding only. The local code sums the same non-negative terms in
            // another order (region order, distance first, and pseudo-sources as count·term)
            // than the global one (instance order); each ordered sum of n non-negative terms
            // is within n·ε relative of the exact sum, so the two differ by at most 2n·ε
            // relative. The bias goes through expm1 of a sum of ln φ: a relative error η of
            // the sum x becomes at most (1 + x)·η in the result. Exactly: local E_bias can
            // exceed the global one by a few ulps (9.859425235013965e-2 > 9.859425235013955e-2
            // on an 18-site chain, found here; see the report of issue #7).
            let n = c.instances.len() as f64;
            let eta = 8.0 * (n + 2.0) * f64::EPSILON;
            let x = (2.0 * g.e_bias / s_o).ln_1p();
            let eta_bias = if x.is_finite() { eta * (1.0 + x) } else { eta };
            let pairs = [
                ("E_wc", l.e_wc, g.e_wc, eta),
                ("E_sys", l.e_sys, g.e_sys, eta),
                ("E_bias", l.e_bias, g.e_bias, eta_bias),
                ("fluctuation of E_avg", l.fluctuation, g.fluctuation, eta),
                ("fluctuation of E_1", l.fluctuation_one, g.fluctuation_one, eta),
                ("E_1", l.e_one, g.e_one, eta_bias),
                ("E_avg", l.e_avg, g.e_avg, eta_bias),
            ];
            for (name, lv, gv, tol) in pairs {
                prop_assert!(lv >= 0.0, "local {} = {:e} at t = {}", name, lv, t);
                prop_assert!(
                    lv <= gv * (1.0 + tol),
                    "local {} = {:e} > global {:e} at t = {}",
                    name,
                    lv,
                    gv,
                    t
                );
            }
            prop_assert!(l.e_one <= s_o && l.e_avg <= s_o);
            if let Some(prev) = last {
                prop_assert!(prev.e_avg <= l.e_avg, "local E_avg fell as t grew");
                prop_assert!(prev.e_one <= l.e_one, "local E_1 fell as t grew");
                prop_assert!(prev.e_wc <= l.e_wc, "local E_wc fell as t grew");
            }
            last = Some(*l);
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Canonical JSON (RFC 8785; docs/method.md Appendix A)
// ---------------------------------------------------------------------------------------------

/// Finite doubles of every kind: normal, subnormal, ±0, extreme exponents, integers.
fn json_number() -> impl Strategy<Value = Value> {
    use prop::num::f64 as f;
    prop_oneof![
        (f::NORMAL | f::SUBNORMAL | f::ZERO).prop_map(Value::from),
        prop_oneof![
            Just(-0.0),
            Just(5e-324),
            Just(f64::MIN_POSITIVE),
            Just(f64::MAX),
            Just(-f64::MAX),
            Just(1e21),
            Just(1e-7),
            Just(9_007_199_254_740_993.0),
        ]
        .prop_map(Value::from),
        any::<i64>().prop_map(Value::from),
        any::<u64>().prop_map(Value::from),
        (-1e6f64..1e6).prop_map(Value::from),
    ]
}

/// Strings with every kind of character: arbitrary Unicode (controls, surrogates-adjacent,
/// astral), and the characters JSON must escape.
fn json_string() -> impl Strategy<Value = String> {
    prop_oneof![
        any::<String>(),
        prop::collection::vec(
            prop::sample::select(vec![
                '"',
                '\\',
                '/',
                '\u{0}',
                '\u{8}',
                '\u{c}',
                '\n',
                '\r',
                '\t',
                '\u{1f}',
                '\u{7f}',
                '\u{80}',
                '\u{2028}',
                '\u{2029}',
                '\u{fffd}',
                '\u{ffff}',
                'é',
                'ß',
                '€',
                '😀',
                '\u{10ffff}',
                'a',
                'Z',
                ' '
            ]),
            0..12
        )
        .prop_map(|v| v.into_iter().collect()),
    ]
}

fn json_value() -> impl Strategy<Value = Value> {
    let leaf = prop_oneof![
        Just(Value::Null),
        any::<bool>().prop_map(Value::Bool),
        json_number(),
        json_string().prop_map(Value::String),
    ];
    leaf.prop_recursive(4, 64, 6, |inner| {
        prop_oneof![
            prop::collection::vec(inner.clone(), 0..6).prop_map(Value::Array),
            prop::collection::vec((json_string(), inner), 0..6)
                .prop_map(|members| Value::Object(members.into_iter().collect())),
        ]
    })
}

proptest! {
    #![proptest_config(config(256))]

    /// Canonicalise, parse, canonicalise again: the same bytes (RFC 8785 §3.2: the canonical
    /// form is a fixed point). Also: the output is valid UTF-8 JSON that parses.
    #[test]
    fn canonical_json_is_idempotent(v in json_value()) {
        let once = to_canonical_bytes(&v).unwrap();
        let parsed: Value = serde_json::from_slice(&once)
            .map_err(|e| TestCaseError::fail(format!("canonical form does not parse: {e}")))?;
        let twice = to_canonical_bytes(&parsed).unwrap();
        prop_assert_eq!(
            String::from_utf8_lossy(&once),
            String::from_utf8_lossy(&twice)
        );
    }
}
