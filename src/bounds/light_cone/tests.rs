//! Unit tests of the light cone: walk sums, regions, tails, exposures and their reuse.

use super::*;
use crate::model::lattice::{Boundary, Geometry};

fn site_instances(n: usize) -> Vec<Instance> {
    (0..n)
        .map(|s| Instance {
            source: 0,
            support: vec![s],
            bond: None,
            delta: 0.1,
            family: Family::Uniform,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: None,
        })
        .collect()
}

/// The committed NumPy fixtures (tests/reference/lieb_robinson/make_fixtures.py): exact
/// `‖[Z_0(τ), Z_j]‖` for XXZ with J = 1, Δ = 0.5 and random Z fields never exceed
/// `s_O·min(1, u_j(τ))` with `s_O = 2` and `J̃ = 2` (the centred norm of the bond term,
/// whose eigenvalues are Δ, Δ, 2 − Δ, −2 − Δ).
#[test]
fn the_bound_holds_on_exact_commutators_from_the_numpy_fixtures() {
    for text in [
        include_str!("../../../tests/reference/lieb_robinson/chain6.json"),
        include_str!("../../../tests/reference/lieb_robinson/square3x3.json"),
    ] {
        let v: serde_json::Value = serde_json::from_str(text).unwrap();
        let shape: Vec<usize> = v["shape"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_u64().unwrap() as usize)
            .collect();
        let geometry = if shape.len() == 1 {
            Geometry::Chain
        } else {
            Geometry::Square
        };
        let lattice = Lattice::regular(geometry, &shape, Boundary::Open).unwrap();
        let bonds: Vec<[usize; 2]> = v["bonds"]
            .as_array()
            .unwrap()
            .iter()
            .map(|b| {
                [
                    b[0].as_u64().unwrap() as usize,
                    b[1].as_u64().unwrap() as usize,
                ]
            })
            .collect();
        assert!(lattice.same_bonds(&bonds), "fixture bond order");
        let n = lattice.n_sites();
        let inst = site_instances(n);
        let graph = WalkGraph::new(&lattice, &vec![2.0; lattice.n_bonds()], 1, &inst).unwrap();
        let taus: Vec<f64> = v["taus"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        let walks = Walks::new(&graph, &[0], &inst, 2.0).unwrap();
        let mut checked = 0;
        let mut tight = 0.0f64;
        for (j, src) in walks.region().iter().enumerate() {
            if src.distance == 0 {
                continue;
            }
            let series = walks.series(j, 2.0);
            for (a, &tau) in taus.iter().enumerate() {
                let exact = v["commutator_norms"][a][src.instance].as_f64().unwrap();
                let u =
                    series.u_truncated(tau) + src.bonds_meeting as f64 * walks.u_tail_per_bond(tau);
                let bound = 2.0 * u.min(1.0);
                assert!(
                    exact <= bound * (1.0 + 1e-9) + 1e-12,
                    "site {} τ={tau}: {exact} > {bound}",
                    src.instance
                );
                if bound < 2.0 && exact > 1e-3 {
                    tight = tight.max(exact / bound);
                }
                checked += 1;
            }
        }
        assert!(checked >= 5 * 41);
        // The bound is not vacuous: somewhere below the cap it is within a factor 100.
        assert!(tight > 0.01, "largest exact/bound below the cap: {tight}");
    }
}

/// On a chain with uniform J̃ the first walk sums are small path counts (exact enumeration
/// by hand): from X = {0} on an open chain, a1 = J on bond 0; W_1(site 1) = J (bond 0
/// meets site 1), W_2(site 1) = J²·(1 + 1) (bond 0 meets bonds 0 and 1, both meet site 1),
/// W_2(site 2) = J² (only bond 1 meets site 2).
#[test]
fn walk_sums_count_paths() {
    let lattice = Lattice::regular(Geometry::Chain, &[8], Boundary::Open).unwrap();
    let inst = site_instances(8);
    let graph = WalkGraph::new(&lattice, &[1.5; 7], 1, &inst).unwrap();
    let walks = Walks::new(&graph, &[0], &inst, 1.0).unwrap();
    let j_of = |site: usize| {
        walks
            .region()
            .iter()
            .position(|s| s.instance == site)
            .unwrap()
    };
    let j = 1.5f64;
    assert_eq!(walks.walk_sum(j_of(1), 1), j);
    assert_eq!(walks.walk_sum(j_of(1), 2), 2.0 * j * j);
    assert_eq!(walks.walk_sum(j_of(2), 1), 0.0);
    assert_eq!(walks.walk_sum(j_of(2), 2), j * j);
    // q = J̃·3 on a chain (a bond meets itself and two others).
    assert_eq!(graph.growth(), 4.5);
}

/// Huge times do not overflow: W_k grows like 5^k on a long chain with J̃ = 5, and T stays
/// finite and at most t, with T(t) − t bounded as the light cone passes.
#[test]
fn large_times_do_not_overflow() {
    let lattice = Lattice::regular(Geometry::Chain, &[4001], Boundary::Open).unwrap();
    let inst = site_instances(4001);
    let graph = WalkGraph::new(&lattice, &vec![5.0; 4000], 1, &inst).unwrap();
    let times = [0.0, 1.0, 10.0, 20.0];
    let e = Exposure::new(&graph, &[2000], &inst, &times).unwrap();
    assert!(e.order() > 300, "order {}", e.order());
    for (k, &t) in times.iter().enumerate() {
        for &v in e.at(k) {
            assert!(v.is_finite() && v >= 0.0 && v <= t);
        }
    }
    // The source 10 sites away is inside the light cone at t = 20: exposed almost all the time.
    let j = e.region().iter().position(|s| s.instance == 2010).unwrap();
    assert!(e.at(3)[j] > 19.0 && e.at(3)[j] <= 20.0);
}

/// One site instance per site and one bond instance per bond.
fn site_and_bond_instances(l: &Lattice) -> Vec<Instance> {
    let mut inst = site_instances(l.n_sites());
    for (e, &[a, b]) in l.bonds().iter().enumerate() {
        inst.push(Instance {
            source: 1,
            support: vec![a.min(b) as usize, a.max(b) as usize],
            bond: Some(e),
            delta: 0.02,
            family: Family::TwoPoint,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: None,
        });
    }
    inst
}

/// Asserts that two exposures are equal to the last bit.
fn assert_same_bits(a: &Exposure, b: &Exposure, what: &str) {
    assert_eq!(a.order(), b.order(), "{what}");
    assert_eq!(a.region(), b.region(), "{what}");
    for k in 0..a.times().len() {
        assert_eq!(
            a.tail_per_bond(k).to_bits(),
            b.tail_per_bond(k).to_bits(),
            "{what}"
        );
        let (x, y) = (a.at(k), b.at(k));
        assert!(
            x.iter().zip(y).all(|(u, v)| u.to_bits() == v.to_bits()),
            "{what} k={k}"
        );
    }
}

/// Exact reuse across translates: on uniform open and periodic chains and an open square
/// lattice, every single-site and nearest-pair support taken from the cache (most of them
/// reusing a translate's values) equals a fresh computation to the last bit, and the
/// interior supports did reuse. With bond norms that differ from bond to bond no region
/// has the shape of another, and nothing is reused.
#[test]
fn translated_supports_reuse_exposures_bit_for_bit() {
    let cases = [
        (
            Geometry::Chain,
            vec![600],
            Boundary::Open,
            1.0,
            vec![0.0, 0.5, 1.0, 2.0],
        ),
        (
            Geometry::Chain,
            vec![120],
            Boundary::Periodic,
            1.0,
            vec![0.3, 1.0],
        ),
        (
            Geometry::Square,
            vec![61, 61],
            Boundary::Open,
            1.0,
            vec![0.0, 0.01, 0.02],
        ),
        (
            Geometry::Chain,
            vec![120],
            Boundary::Open,
            -1.0,
            vec![0.5, 1.0],
        ),
    ];
    for (g, shape, b, norm, times) in cases {
        let l = Lattice::regular(g, &shape, b).unwrap();
        let inst = site_and_bond_instances(&l);
        // norm < 0: bond norms 1 + e/1000, all different.
        let norms: Vec<f64> = (0..l.n_bonds())
            .map(|e| {
                if norm > 0.0 {
                    norm
                } else {
                    1.0 + e as f64 / 1000.0
                }
            })
            .collect();
        let graph = WalkGraph::new(&l, &norms, 1, &inst).unwrap();
        let index = InstanceIndex::new(&inst, l.n_sites());
        let mut supports: Vec<Vec<usize>> = if g == Geometry::Square {
            // The middle row (sites 30·61 + y) and its horizontal pairs.
            let row: Vec<usize> = (0..61).map(|y| 30 * 61 + y).collect();
            let mut v: Vec<Vec<usize>> = row.iter().map(|&s| vec![s]).collect();
            v.extend(row.windows(2).map(|w| w.to_vec()));
            v
        } else {
            let mut v: Vec<Vec<usize>> = (0..l.n_sites()).map(|s| vec![s]).collect();
            v.extend(
                l.bonds()
                    .iter()
                    .map(|&[a, b]| vec![a.min(b) as usize, a.max(b) as usize]),
            );
            v
        };
        supports.iter_mut().for_each(|s| s.sort_unstable());
        let refs: Vec<&[usize]> = supports.iter().map(|s| s.as_slice()).collect();
        let mut cache = ExposureCache::new(1 << 22);
        // Two batches, so that kept shapes and shapes new in a batch are both exercised.
        let half = refs.len() / 2;
        let mut got = cache.exposures(&graph, &index, &times, &refs[..half]);
        got.extend(cache.exposures(&graph, &index, &times, &refs[half..]));
        for (x, e) in supports.iter().zip(&got) {
            let fresh = Exposure::new(&graph, x, &inst, &times).unwrap();
            assert_same_bits(e.as_ref().unwrap(), &fresh, &format!("{g:?} {b:?} {x:?}"));
        }
        let (computed, reused) = cache.counts();
        assert_eq!(computed + reused, supports.len());
        if norm > 0.0 {
            // On a periodic lattice the neighbour lists of the sites at the seam (where
            // the wrapped bonds are numbered) are in another order, so the regions that
            // contain the seam are computed afresh: fewer reuses there.
            let wanted = match (g, b) {
                (_, Boundary::Periodic) => 10,
                (Geometry::Square, _) => 20,
                _ => supports.len() / 2,
            };
            assert!(
                reused > wanted,
                "{g:?} {b:?}: {computed} computed, {reused} reused"
            );
            // Interior single sites share one computation.
            let mid = if g == Geometry::Square {
                30
            } else {
                l.n_sites() / 2
            };
            let a = got[mid].as_ref().unwrap();
            assert!(a.shares_values_with(got[mid + 1].as_ref().unwrap()));
        } else {
            assert_eq!(reused, 0, "{g:?}: different couplings must not be reused");
        }
    }
}

#[test]
fn unavailable_reasons_are_reported() {
    let lattice = Lattice::regular(Geometry::Chain, &[4], Boundary::Open).unwrap();
    let mut inst = site_instances(4);
    assert!(matches!(
        WalkGraph::new(&lattice, &[1.0; 3], 2, &inst),
        Err(Unavailable::InteractionRange(2))
    ));
    inst.push(Instance {
        source: 1,
        support: vec![0, 1],
        bond: Some(0),
        delta: 0.1,
        family: Family::Normal { sigma: 1.0 },
        mean_offset: 0.0,
        mean_offset_uncertainty: 0.0,
        correlation_time: None,
    });
    assert!(matches!(
        WalkGraph::new(&lattice, &[1.0; 3], 1, &inst),
        Err(Unavailable::UnboundedBondSource { .. })
    ));
    inst.pop();
    inst.push(Instance {
        source: 1,
        support: vec![0, 2],
        bond: None,
        delta: 0.1,
        family: Family::Uniform,
        mean_offset: 0.0,
        mean_offset_uncertainty: 0.0,
        correlation_time: None,
    });
    assert!(matches!(
        WalkGraph::new(&lattice, &[1.0; 3], 1, &inst),
        Err(Unavailable::OffGraphSource { .. })
    ));
    inst.pop();
    let g = WalkGraph::new(&lattice, &[1.0; 3], 1, &inst).unwrap();
    assert!(matches!(
        Exposure::new(&g, &[], &inst, &[1.0]),
        Err(Unavailable::GlobalObservable)
    ));
}

/// The comparison with an interior region (docs/method.md §5): on uniform open chains and
/// square lattices, every single-site support whose region cannot meet the boundary gets from
/// the comparison table exactly its exact values (to the bit, tail included), and every other
/// support gets values never below its exact ones, strictly above for some sources (the
/// comparison only loosens, and does loosen).
#[test]
fn the_comparison_equals_interior_regions_and_bounds_boundary_ones() {
    for (g, times) in [
        (Geometry::Chain, vec![0.0, 0.4, 1.0, 2.0]),
        (Geometry::Square, vec![0.0, 0.01, 0.02, 0.03]),
    ] {
        // K does not depend on the size once the lattice has interior bonds.
        let small = Lattice::regular(g, &vec![5; g.dimension()], Boundary::Open).unwrap();
        let inst = site_and_bond_instances(&small);
        let graph = WalkGraph::new(&small, &vec![1.0; small.n_bonds()], 1, &inst).unwrap();
        let order = ComparisonPlan::new(&graph, &inst, &times).unwrap().order();
        // Room for a few interior sites on each axis.
        let side = 2 * order + 5 + 4;
        let l = Lattice::regular(g, &vec![side; g.dimension()], Boundary::Open).unwrap();
        let inst = site_and_bond_instances(&l);
        let graph = WalkGraph::new(&l, &vec![1.0; l.n_bonds()], 1, &inst).unwrap();
        let plan = ComparisonPlan::new(&graph, &inst, &times).unwrap();
        assert_eq!(plan.order(), order);
        let cmp = plan.build(&times).unwrap();
        let (mut interior, mut boundary, mut looser) = (0, 0, 0);
        for x in 0..l.n_sites() {
            let exact = Exposure::new(&graph, &[x], &inst, &times).unwrap();
            let inside = cmp.plan().interior(x);
            if inside {
                interior += 1;
                assert_eq!(exact.order(), order);
                assert_eq!(exact.region().len(), cmp.region_sources(), "{g:?} site {x}");
            } else {
                boundary += 1;
            }
            for k in 0..times.len() {
                let (c, e) = (cmp.tail_per_bond(k), exact.tail_per_bond(k));
                if inside {
                    assert_eq!(c.to_bits(), e.to_bits(), "{g:?} site {x} tail");
                } else {
                    assert!(c * cmp.factor() >= e, "{g:?} site {x} tail {c} < {e}");
                    assert!(c >= e * (1.0 - 1e-12), "{g:?} site {x} tail {c} ≪ {e}");
                }
                for (src, &v) in exact.region().iter().zip(exact.at(k)) {
                    let w = cmp.value(k, cmp.slot(src.instance), x);
                    if inside {
                        assert_eq!(w.to_bits(), v.to_bits(), "{g:?} site {x} source {src:?}");
                    } else {
                        // Equal in exact arithmetic where the boundary is out of reach
                        // of the orders that matter: then rounding decides, and the factor
                        // of the compared terms covers it.
                        assert!(w >= v * (1.0 - 1e-12), "{g:?} site {x}: {w} ≪ {v}");
                        assert!(
                            w * cmp.factor() >= v,
                            "{g:?} site {x} source {src:?} k={k}: {w} < {v}; order {} tails {c} {e}",
                            exact.order()
                        );
                        looser += (w > v) as usize;
                    }
                }
            }
        }
        assert!(
            interior >= 4 && boundary > 0,
            "{g:?}: {interior} / {boundary}"
        );
        assert!(looser > boundary, "{g:?}: {looser} looser values");
        // The accumulation over the whole lattice adds exactly c · value for every slot (a
        // corner, a site near the middle, a site at the far end).
        for x in [0, l.n_sites() / 2 + 1, l.n_sites() - 2] {
            for k in 0..times.len() {
                let mut row = vec![0.0f64; cmp.row_len()];
                cmp.accumulate(k, 0.75, x, &mut row);
                for i in 0..inst.len() {
                    let slot = cmp.slot(i);
                    let want = 0.75 * cmp.value(k, slot, x);
                    assert_eq!(
                        row[slot].to_bits(),
                        want.to_bits(),
                        "{g:?} site {x} slot {slot}"
                    );
                }
            }
        }
    }
}

/// The comparison does not apply where its argument does not hold: bonds with different
/// `J̃`, a periodic lattice (its walks wrap around), or a support that is not a site or a bond.
#[test]
fn the_comparison_needs_uniform_bonds_and_an_open_regular_lattice() {
    let times = [0.0, 0.5];
    let l = Lattice::regular(Geometry::Chain, &[40], Boundary::Open).unwrap();
    let mut inst = site_and_bond_instances(&l);
    let graph = WalkGraph::new(&l, &vec![1.0; l.n_bonds()], 1, &inst).unwrap();
    assert!(ComparisonPlan::new(&graph, &inst, &times).is_some());
    let mut norms = vec![1.0; l.n_bonds()];
    norms[7] = 0.5;
    let uneven = WalkGraph::new(&l, &norms, 1, &inst).unwrap();
    assert!(ComparisonPlan::new(&uneven, &inst, &times).is_none());
    inst[3].support = vec![3, 5];
    assert!(ComparisonPlan::new(&graph, &inst, &times).is_none());
    let p = Lattice::regular(Geometry::Chain, &[40], Boundary::Periodic).unwrap();
    let inst = site_and_bond_instances(&p);
    let graph = WalkGraph::new(&p, &vec![1.0; p.n_bonds()], 1, &inst).unwrap();
    assert!(ComparisonPlan::new(&graph, &inst, &times).is_none());
}
