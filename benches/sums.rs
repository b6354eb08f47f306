//! Benchmark (not a test) of the term-by-term statement for observables that are sums of local
//! terms: the magnetisation `(1/n) Σ_i Z_i` of every site of a chain or a square lattice, with
//! a uniform detuning on every site and a two-point coupling jitter on every bond (an invented
//! scenario), through the same evaluator `certify` uses (whole-support and term-by-term
//! light cones, global statement, combination). Prints the wall time per case and the peak
//! resident memory (VmHWM from /proc/self/status, Linux).
//!
//! Run: `cargo bench --bench sums` (all cases), or
//! `cargo bench --bench sums -- chain 10000 square 100` (chains of n sites, square lattices of
//! L × L sites); `QUASSAY_BENCH_TMAX` (default 4 µs) and `QUASSAY_BENCH_TIMES` (default 21)
//! set the time grid `0, t_max/(T−1), …, t_max`. `-- dump` prints digests of the numbers
//! instead (see `dump`); `-- loosening square 30` runs each case with and without the
//! comparison with an interior region (docs/method.md §5) and prints by how much the
//! comparison loosens the term-by-term fluctuation term.

use std::time::Instant;

use quassay::bounds::confidence::Simultaneity;
use quassay::bounds::run_bounds::{ObservableSums, RunEvaluator, RunGeometry, ShotSums};
use quassay::model::lattice::{Boundary, Geometry, Lattice};
use quassay::model::noise::{Family, Instance, NoiseModel, Redrawn};
use quassay::model::{FrequencyUnit, Hamiltonian, Terms, TimeUnit};

fn peak_memory_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn env_or(name: &str, default: f64) -> f64 {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// Invented scenario: bond norm 0.1 MHz (a weakly coupled XXZ model), a uniform detuning of
/// 2 kHz on every site and a two-point jitter of 0.5 kHz on every bond, times in µs.
/// The bounds of the magnetisation and the wall time; `compare` allows the comparison with an
/// interior region (docs/method.md §5).
fn case(
    geometry: Geometry,
    shape: &[usize],
    times: &[f64],
    compare: bool,
) -> (quassay::bounds::run_bounds::ObservableBounds, f64) {
    let lattice = Lattice::regular(geometry, shape, Boundary::Open).unwrap();
    let n = lattice.n_sites();
    let khz = 2.0 * std::f64::consts::PI * 1e-3; // kHz → rad/µs
    let mut instances: Vec<Instance> = (0..n)
        .map(|s| Instance {
            source: 0,
            support: vec![s],
            bond: None,
            delta: 2.0 * khz,
            family: Family::Uniform,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: None,
        })
        .collect();
    for (e, &[a, b]) in lattice.bonds().iter().enumerate() {
        instances.push(Instance {
            source: 1,
            support: vec![a as usize, b as usize],
            bond: Some(e),
            delta: 0.5 * khz,
            family: Family::TwoPoint,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: None,
        });
    }
    let noise = NoiseModel {
        redrawn: Redrawn::EveryRealization,
        instances,
        device: Default::default(),
    };
    let hamiltonian = Hamiltonian {
        energy_unit: FrequencyUnit::MHz,
        bond_norm_max: 0.1,
        bond_norms: None,
        interaction_range: 1,
    };
    let terms = Terms {
        supports: (0..n).map(|s| vec![s]).collect(),
        weights: vec![1.0 / n as f64; n],
        spectra: vec![[-1.0, 1.0]; n],
    };
    let support: Vec<usize> = (0..n).collect();
    let r = 20;
    let sums = ObservableSums {
        realizations: r,
        value_sums: vec![0.0; times.len()],
        shots: ShotSums::Uniform(1000),
    };
    let start = Instant::now();
    let geometry_ = RunGeometry {
        lattice: &lattice,
        hamiltonian: &hamiltonian,
        time_unit: TimeUnit::Us,
    };
    let mut ev = RunEvaluator::new(
        times,
        &noise,
        geometry_,
        1,
        0.95,
        Simultaneity::Simultaneous,
    )
    .unwrap();
    ev.set_comparison(compare);
    let b = ev.observable("magnetisation", 2.0, &support, Some(&terms), &sums);
    let elapsed = start.elapsed().as_secs_f64();
    let (tbt, compared) = b
        .term_by_term
        .as_ref()
        .map(|t| (t.n_terms, t.compared))
        .unwrap_or((0, 0));
    let last = b.points.len() - 1;
    println!(
        "{:>6} {:>9} {:>8} {:>6} {:>9.2} s   E_avg(t_max) = {:.6e} ({}), term-by-term terms {} \
         ({} compared); {}",
        geometry.as_str(),
        shape
            .iter()
            .map(|x| x.to_string())
            .collect::<Vec<_>>()
            .join("x"),
        noise.instances.len(),
        times.len(),
        elapsed,
        b.points[last].e_avg,
        b.statements[last].form(),
        tbt,
        compared,
        b.light_cone.describe().split(';').next().unwrap_or(""),
    );
    (b, elapsed)
}

/// `-- loosening square 30`: the term-by-term fluctuation term with the comparison over the
/// one with every term's exact region, at a few times (the comparison only loosens).
fn loosening(geometry: Geometry, shape: &[usize], times: &[f64]) {
    let (with, _) = case(geometry, shape, times, true);
    let (without, _) = case(geometry, shape, times, false);
    let (Some(a), Some(b)) = (&with.term_by_term, &without.term_by_term) else {
        println!("no term-by-term statement");
        return;
    };
    println!("   t     fluctuation with / without comparison    E_avg ratio");
    for k in (0..times.len()).step_by((times.len() / 5).max(1)) {
        let (x, y) = (a.points[k], b.points[k]);
        println!(
            "{:>6.3}  {:.6e} / {:.6e} = {:.4}   {:.4}",
            times[k],
            x.fluctuation,
            y.fluctuation,
            x.fluctuation / y.fluctuation,
            x.e_avg / y.e_avg
        );
    }
}

/// `cargo bench --bench sums -- dump`: hashes of every bit of the fresh exposures of every
/// single site and of the bounds of three observables (two sums, one site) on four small
/// lattices, to compare two builds (equal hashes: the same numbers to the bit).
fn dump() {
    use quassay::bounds::light_cone::{Exposure, WalkGraph};
    use std::hash::{Hash, Hasher};
    let times = [0.0, 0.3, 1.0, 2.5];
    for (g, shape, b) in [
        (Geometry::Chain, vec![300], Boundary::Open),
        (Geometry::Chain, vec![200], Boundary::Periodic),
        (Geometry::Square, vec![25, 25], Boundary::Open),
        (Geometry::Square, vec![12, 12], Boundary::Periodic),
    ] {
        let lattice = Lattice::regular(g, &shape, b).unwrap();
        let n = lattice.n_sites();
        let mut instances: Vec<Instance> = (0..n)
            .map(|s| Instance {
                source: 0,
                support: vec![s],
                bond: None,
                delta: 0.05,
                family: Family::Uniform,
                mean_offset: 0.1,
                mean_offset_uncertainty: 0.0,
                correlation_time: None,
            })
            .collect();
        for (e, &[a, b]) in lattice.bonds().iter().enumerate() {
            instances.push(Instance {
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
        let graph = WalkGraph::new(&lattice, &vec![1.0; lattice.n_bonds()], 1, &instances).unwrap();
        let mut h = std::collections::hash_map::DefaultHasher::new();
        for s in 0..n {
            let e = Exposure::new(&graph, &[s], &instances, &times).unwrap();
            e.order().hash(&mut h);
            for r in e.region() {
                (r.instance, r.distance, r.bonds_meeting).hash(&mut h);
            }
            for k in 0..times.len() {
                e.tail_per_bond(k).to_bits().hash(&mut h);
                for v in e.at(k) {
                    v.to_bits().hash(&mut h);
                }
            }
        }
        let noise = NoiseModel {
            redrawn: Redrawn::EveryRealization,
            instances: instances.clone(),
            device: Default::default(),
        };
        let hamiltonian = Hamiltonian {
            energy_unit: FrequencyUnit::RadPerUs,
            bond_norm_max: 1.0,
            bond_norms: None,
            interaction_range: 1,
        };
        let geometry = RunGeometry {
            lattice: &lattice,
            hamiltonian: &hamiltonian,
            time_unit: TimeUnit::Us,
        };
        let mut ev = RunEvaluator::new(
            &times,
            &noise,
            geometry,
            2,
            0.95,
            Simultaneity::Simultaneous,
        )
        .unwrap();
        let sums = ObservableSums {
            realizations: 10,
            value_sums: vec![0.0; times.len()],
            shots: ShotSums::Uniform(1000),
        };
        let support: Vec<usize> = (0..n).collect();
        let terms = Terms {
            supports: (0..n).map(|s| vec![s]).collect(),
            weights: (0..n)
                .map(|s| if s % 2 == 0 { 1.0 } else { -1.0 } / n as f64)
                .collect(),
            spectra: vec![[-1.0, 1.0]; n],
        };
        let pairs = Terms {
            supports: (0..n - 1).map(|s| vec![s, s + 1]).collect(),
            weights: vec![1.0 / n as f64; n - 1],
            spectra: vec![[-1.0, 1.0]; n - 1],
        };
        let b1 = ev.observable("stag", 2.0, &support, Some(&terms), &sums);
        let b2 = ev.observable("pairs", 2.0, &support, Some(&pairs), &sums);
        let b3 = ev.observable("z3", 2.0, &[3], None, &sums);
        let text = format!("{b1:?}{b2:?}{b3:?}");
        let mut h2 = std::collections::hash_map::DefaultHasher::new();
        text.hash(&mut h2);
        println!(
            "{g:?} {shape:?} {b:?}: exposures {:016x} bounds {:016x}",
            h.finish(),
            h2.finish()
        );
    }
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    if args.first().map(|s| s.as_str()) == Some("dump") {
        dump();
        return;
    }
    let t_max = env_or("QUASSAY_BENCH_TMAX", 4.0);
    let n_t = env_or("QUASSAY_BENCH_TIMES", 21.0).max(2.0) as usize;
    let times: Vec<f64> = (0..n_t)
        .map(|k| t_max * k as f64 / (n_t - 1) as f64)
        .collect();
    let mut cases: Vec<(Geometry, Vec<usize>)> = Vec::new();
    let loosen = args.first().map(|s| s.as_str()) == Some("loosening");
    let mut it = args.iter().skip(loosen as usize);
    while let (Some(g), Some(size)) = (it.next(), it.next()) {
        let size: usize = size.parse().expect("a size");
        match g.as_str() {
            "chain" => cases.push((Geometry::Chain, vec![size])),
            "square" => cases.push((Geometry::Square, vec![size, size])),
            other => panic!("unknown geometry {other} (chain or square)"),
        }
    }
    if cases.is_empty() {
        for n in [1000, 3000, 10_000] {
            cases.push((Geometry::Chain, vec![n]));
        }
        for l in [30, 60, 100] {
            cases.push((Geometry::Square, vec![l, l]));
        }
    }
    println!(
        "magnetisation of every site, {} times up to t = {} us, {} threads",
        n_t,
        t_max,
        rayon::current_num_threads()
    );
    println!("  geom     shape  sources  times      time");
    for (g, shape) in cases {
        if loosen {
            loosening(g, &shape, &times);
        } else {
            case(g, &shape, &times, true);
        }
    }
    match peak_memory_kib() {
        Some(k) => println!("peak resident memory: {:.0} MiB", k as f64 / 1024.0),
        None => println!("peak resident memory: not available"),
    }
}
