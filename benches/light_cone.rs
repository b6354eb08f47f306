//! Benchmark (not a test) of the light-cone bounds: one single-site observable in the middle
//! of a 1000 × 1000 square lattice, a uniform noise source on every site and a two-point one
//! on every bond (an invented scenario), 50 times up to t = 5/J. Prints the wall time and the
//! peak resident memory (VmHWM from /proc/self/status, Linux).
//!
//! Run: `cargo bench --bench light_cone`. With `QUASSAY_BENCH_WINDOWS=1` every source is drawn
//! again every τ = t_max/50 = 0.1/J during the evolution (noise record version 3,
//! docs/method.md §3 "Windows"), the case of the issue on windowed noise.

use std::time::Instant;

use quassay::bounds::global::SourceData;
use quassay::bounds::light_cone::WalkGraph;
use quassay::bounds::local::{local_bounds, LocalInputs};
use quassay::model::lattice::{Boundary, Geometry, Lattice};
use quassay::model::noise::{Family, Instance, Redrawn};

fn peak_memory_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn main() {
    let start = Instant::now();
    let windows = std::env::var_os("QUASSAY_BENCH_WINDOWS").is_some();
    let tau = windows.then_some(0.1);
    let l = Lattice::regular(Geometry::Square, &[1000, 1000], Boundary::Open).unwrap();
    let mut inst: Vec<Instance> = (0..l.n_sites())
        .map(|s| Instance {
            source: 0,
            support: vec![s],
            bond: None,
            delta: 0.02,
            family: Family::Uniform,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: tau,
        })
        .collect();
    for (e, &[a, b]) in l.bonds().iter().enumerate() {
        inst.push(Instance {
            source: 1,
            support: vec![a as usize, b as usize],
            bond: Some(e),
            delta: 0.01,
            family: Family::TwoPoint,
            mean_offset: 0.0,
            mean_offset_uncertainty: 0.0,
            correlation_time: tau,
        });
    }
    let sources: Vec<SourceData> = inst.iter().map(SourceData::from_instance).collect();
    let built = start.elapsed();
    let graph = WalkGraph::new(&l, &vec![1.0; l.n_bonds()], 1, &inst).unwrap();
    let times: Vec<f64> = (1..=50).map(|k| 0.1 * k as f64).collect();
    let t0 = Instant::now();
    let out = local_bounds(&LocalInputs {
        graph: &graph,
        support: &[500 * 1000 + 500],
        s_o: 2.0,
        instances: &inst,
        sources: &sources,
        times: &times,
        redrawn: Redrawn::EveryRealization,
        realizations: 100,
        p: 0.05 / 50.0,
        p_single: 0.05 / 50.0,
    })
    .unwrap();
    let local = t0.elapsed();
    let last = out.last().unwrap();
    println!(
        "lattice 1000x1000, {} sources, 50 times up to t = 5/J, {}",
        inst.len(),
        match tau {
            Some(t) => format!("noise drawn again every {t}/J"),
            None => "static noise".to_string(),
        }
    );
    println!("setup (lattice, instances): {:.2} s", built.as_secs_f64());
    println!("local bounds, all times:    {:.2} s", local.as_secs_f64());
    println!(
        "at t = 5: E_wc = {:.4e}, E_sys = {:.4e}, E_bias = {:.4e} ({:?}), fluctuation = {:.4e} ({:?}), E_avg = {:.4e}",
        last.e_wc, last.e_sys, last.e_bias, last.bias_set, last.fluctuation, last.route, last.e_avg
    );
    println!(
        "global worst case at t = 5 for comparison: {:.4e}",
        2.0 * 5.0 * (0.02 * l.n_sites() as f64 + 0.01 * l.n_bonds() as f64)
    );
    match peak_memory_kib() {
        Some(k) => println!("peak resident memory: {:.0} MiB", k as f64 / 1024.0),
        None => println!("peak resident memory: not available"),
    }
}
