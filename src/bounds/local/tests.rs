//! Unit tests of the local statements: bounds against the global ones, scaling in time and
//! size, and the term-by-term statement.

use super::term_by_term::{comparison_plan, term_bounds_from};
use super::*;
use crate::bounds::global::PointBounds;
use crate::bounds::light_cone::{ExposureCache, InstanceIndex};
use crate::model::lattice::{Boundary, Geometry, Lattice};
use crate::model::noise::Family;
use crate::model::Terms;

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
            correlation_time: None,
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
            correlation_time: None,
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
            let global_wc = 2.0 * t * (0.055 * ls.n_sites() as f64 + 0.05 * ls.n_bonds() as f64);
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

/// Runs `f` on the inputs of an observable of spread 2 over every site of `l` (the sources of
/// [`instances`], bond norms 1, 10 realizations, `p = 10^{-3}`) and its whole-support exposure.
fn every_site(l: &Lattice, times: &[f64], f: impl FnOnce(&LocalInputs, &Exposure)) {
    let inst = instances(l, 0.05, 0.02);
    let sources: Vec<SourceData> = inst.iter().map(SourceData::from_instance).collect();
    let graph = WalkGraph::new(l, &vec![1.0; l.n_bonds()], 1, &inst).unwrap();
    let support: Vec<usize> = (0..l.n_sites()).collect();
    let inp = inputs(&graph, &inst, &sources, &support, times, 10, 1e-3);
    let whole = Exposure::new(&graph, &support, &inst, times).unwrap();
    f(&inp, &whole)
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
        every_site(&l, &times, |inp, whole| reuse_case(g, inp, whole));
    }
}

/// One case of [`reused_term_exposures_give_the_same_bits_as_fresh_ones`].
fn reuse_case(g: Geometry, inp: &LocalInputs, whole: &Exposure) {
    let (inp, n) = (*inp, inp.graph.lattice().n_sites());
    let (graph, inst, times) = (inp.graph, inp.instances, inp.times);
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
    let reused = term_bounds(&inp, &terms, whole).unwrap();
    let comparison = comparison_plan(&inp, &terms).and_then(|p| p.build(times));
    let fresh = term_bounds_from(&inp, &terms, whole, comparison.as_ref(), &mut |batch| {
        batch
            .iter()
            .map(|x| Exposure::new(graph, x, inst, times))
            .collect()
    })
    .unwrap();
    assert_eq!(format!("{reused:?}"), format!("{fresh:?}"), "{g:?}");
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap()
        .install(|| term_bounds(&inp, &terms, whole).unwrap());
    assert_eq!(
        format!("{reused:?}"),
        format!("{one:?}"),
        "{g:?} one thread"
    );
    // Reuse happened: far fewer shapes than terms.
    let index = InstanceIndex::new(inst, n);
    let mut cache = ExposureCache::new(TERMS_BUDGET);
    term_bounds_cached(&inp, &terms, whole, &index, &mut cache).unwrap();
    let (computed, again) = cache.counts();
    let wanted = if g == Geometry::Square { 10 } else { m / 2 };
    assert!(again > wanted, "{g:?}: {computed} computed, {again} reused");
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
        fluctuation_static: inf,
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

/// The comparison with an interior region (docs/method.md §5) in the term-by-term statement of
/// a magnetisation on an open square lattice: every term of the sensitivities that is monotone
/// in them (worst case, systematic part, fluctuation, Efron–Stein variance) is never below the
/// statement with every term's exact region, and above it somewhere; a sum of interior terms
/// alone compares no term and gives the same bits. The rule of [`COMPARISON_WORK`] keeps the
/// exact regions on small lattices (the bundled examples) and compares on large ones.
#[test]
fn the_comparison_only_loosens_the_term_by_term_statement() {
    let times = [0.0, 0.01, 0.02, 0.03];
    let l = Lattice::regular(Geometry::Square, &[48, 48], Boundary::Open).unwrap();
    every_site(&l, &times, comparison_case);
    // The rule: a 3 × 4 lattice (the size of the bundled examples) does not compare.
    let small = Lattice::regular(Geometry::Square, &[3, 4], Boundary::Open).unwrap();
    every_site(&small, &times, |inp, _| {
        let all = Terms {
            supports: (0..12).map(|s| vec![s]).collect(),
            weights: vec![1.0 / 12.0; 12],
            spectra: vec![[-1.0, 1.0]; 12],
        };
        assert!(comparison_plan(inp, &all).is_none());
    });
}

/// The 48 × 48 case of [`the_comparison_only_loosens_the_term_by_term_statement`].
fn comparison_case(inp: &LocalInputs, whole: &Exposure) {
    use crate::bounds::light_cone::ComparisonPlan;
    let (graph, inst, times) = (inp.graph, inp.instances, inp.times);
    let n = graph.lattice().n_sites();
    // Exact regions through the cache (equal to fresh ones to the bit: tested above).
    let index = InstanceIndex::new(inst, n);
    let mut cache = ExposureCache::new(TERMS_BUDGET);
    let mut fresh = |batch: &[&[usize]]| cache.exposures(graph, &index, times, batch);
    let cmp = ComparisonPlan::new(graph, inst, times)
        .unwrap()
        .build(times)
        .unwrap();
    let all = Terms {
        supports: (0..n).map(|s| vec![s]).collect(),
        weights: vec![1.0 / n as f64; n],
        spectra: vec![[-1.0, 1.0]; n],
    };
    let with = term_bounds_from(inp, &all, whole, Some(&cmp), &mut |b| fresh(b)).unwrap();
    let without = term_bounds_from(inp, &all, whole, None, &mut |b| fresh(b)).unwrap();
    let interior = (0..n).filter(|&s| cmp.plan().interior(s)).count();
    assert!(interior > 0, "no interior site: K = {}", cmp.plan().order());
    assert_eq!(with.compared, n - interior);
    assert_eq!(without.compared, 0);
    let mut looser = 0;
    for (a, b) in with.points.iter().zip(&without.points) {
        assert!(a.e_wc >= b.e_wc && a.e_sys >= b.e_sys, "{a:?} {b:?}");
        assert!(a.fluctuation >= b.fluctuation && a.v_noise >= b.v_noise);
        looser += (a.fluctuation > b.fluctuation) as usize;
    }
    assert!(looser >= 2, "the comparison loosened nothing");
    // Interior terms alone: nothing compared, the same bits.
    let inner: Vec<usize> = (0..n).filter(|&s| cmp.plan().interior(s)).collect();
    let some = Terms {
        supports: inner.iter().map(|&s| vec![s]).collect(),
        weights: vec![1.0 / n as f64; inner.len()],
        spectra: vec![[-1.0, 1.0]; inner.len()],
    };
    let a = term_bounds_from(inp, &some, whole, Some(&cmp), &mut |b| fresh(b)).unwrap();
    let b = term_bounds_from(inp, &some, whole, None, &mut |b| fresh(b)).unwrap();
    assert_eq!(a.compared, 0);
    assert_eq!(format!("{a:?}"), format!("{b:?}"));
    // The rule: this lattice is large enough to compare.
    assert!(comparison_plan(inp, &all).is_some());
}
