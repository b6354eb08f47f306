//! The whole simulation: scenario in, run model and exact truth out.
//!
//! For every realization (in parallel with rayon, gathered in realization order, each with its
//! own random stream, so the result does not depend on the thread count):
//!
//! 1. draw `g` for every instance of the TRUE noise (per realization, once, or per shot);
//! 2. build `H(g) = H + Σ_i a_i (μ_i + g_i) V_i` (`a_i` the true amplitude in rad per time
//!    unit, `V_i` the physical operator) and evolve the initial product state from one
//!    recorded time to the next;
//! 3. at every time, for every observable, record the exact value and the shot mean.
//!
//! Random numbers of one realization are consumed in a fixed order: the noise draws (instance
//! order), then per time, per observable (name order), the shots. With noise redrawn every
//! shot, each shot is a fresh draw and a full evolution, and contributes one outcome per time
//! and observable: `R · S` evolutions.
//!
//! With a preparation error (each site's initial state flipped by X with probability q in
//! every shot), a realization draws after its noise the numbers of shots with each flip
//! pattern ([`sample::flip_pattern_counts`], a `BTreeMap` from pattern to count), evolves each
//! distinct pattern once under the realization's `H(g)`, in pattern order, and samples that
//! pattern's shots from it (per time, per observable). Shot means pool all S shots; the exact
//! value is the mixture `Σ_p N_p ⟨O⟩_p / S`. With noise redrawn every shot, the shot's pattern
//! is drawn after its noise (one uniform per site). Without the key, or with q = 0, no number
//! is drawn for it and the output is the same as without the feature. All realizations draw
//! their patterns before any evolution, so that [`try_simulate`] can refuse a scenario that
//! would need more than [`MAX_PATTERN_EVOLUTIONS`] evolutions before spending them.

use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::time::Instant;

use ndarray::Array2;
use num_complex::Complex64;
use rand_chacha::rand_core::RngCore;
use rayon::prelude::*;

use super::hamiltonian::{Operator, PauliSum};
use super::open::{DeviceTruth, OpenSetup};
use super::pauli::{parity_sign, PauliString};
use super::propagate::{evolve, Workspace, DEFAULT_TOLERANCE};
use super::sample;
use crate::error::Problem;
use crate::inputs::scenario::{
    instance_supports, NoiseOperator, ObservableSpec, Scenario, SiteState, MAX_PATTERN_EVOLUTIONS,
};
use crate::model::noise::Amplitude;
use crate::model::{Family, Hamiltonian, Observable, Redrawn, Run, Shots, Terms};

/// Largest number of stored per-shot draws (`R · S · instances`) in the truth file.
pub const MAX_STORED_SHOT_DRAWS: usize = 1_000_000;

/// One instance of the true noise, as simulated.
#[derive(Debug, Clone, PartialEq)]
pub struct TrueInstance {
    /// Index of its source in the true record.
    pub source: usize,
    pub support: Vec<usize>,
    pub operator: NoiseOperator,
    /// The amplitude `a_i` in rad per time unit (not multiplied by the half spread).
    pub amplitude: f64,
    /// μ_i.
    pub mean_offset: f64,
    pub family: Family,
    /// The correlation time τ in the scenario's time unit (the noise is drawn again at every
    /// multiple of τ during an evolution), or `None` for one draw per evolution.
    pub correlation_time: Option<f64>,
}

/// Exact values of one observable.
#[derive(Debug, Clone, PartialEq)]
pub struct TruthObservable {
    pub name: String,
    /// Exact noisy expectation per realization and time (every_shot: mean over the shots).
    pub exact: Array2<f64>,
    /// Exact expectation under the target Hamiltonian alone.
    pub ideal: Vec<f64>,
}

/// What the simulator knows exactly.
#[derive(Debug, Clone, PartialEq)]
pub struct Truth {
    pub seed: u64,
    pub redrawn: Redrawn,
    pub instances: Vec<TrueInstance>,
    pub observables: Vec<TruthObservable>,
    /// The draws `g`, one row per draw: R rows (every_realization), 1 (once), R·S (every_shot,
    /// realization-major) or `None` if there would be more than [`MAX_STORED_SHOT_DRAWS`].
    pub draws: Option<Array2<f64>>,
    /// The preparation error, if the scenario has one.
    pub preparation: Option<PreparationTruth>,
}

/// What the simulator drew for a preparation error.
#[derive(Debug, Clone, PartialEq)]
pub struct PreparationTruth {
    /// q.
    pub flip_probability: f64,
    /// The flip patterns used: per realization (in order) its distinct patterns in increasing
    /// order of the mask with their shot counts; every_shot: one row per shot, realization-major,
    /// with count 1. `None` if `rows × n_sites` would exceed [`MAX_STORED_SHOT_DRAWS`].
    pub patterns: Option<Vec<PatternRow>>,
}

/// One flip pattern of one realization.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PatternRow {
    pub realization: usize,
    /// Bit `i` set if site `i` was flipped.
    pub mask: u64,
    /// Number of shots prepared with this pattern.
    pub shots: u64,
}

/// Work counters and accuracy of a simulation.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Stats {
    pub evolutions: usize,
    pub products: usize,
    /// Largest rigorous truncation bound accumulated along one evolution (state norm).
    pub max_truncation_bound: f64,
    /// Largest norm drift seen along one evolution.
    pub max_norm_drift: f64,
    /// Sum over realizations of the number of distinct flip patterns evolved (0 without a
    /// preparation error; every_shot: shots with at least one flip).
    pub flip_patterns: usize,
    /// Density-matrix evolutions (device errors): applications of the Lindblad generator.
    pub generator_applications: usize,
    pub seconds: f64,
}

/// The result of [`simulate`].
#[derive(Debug, Clone, PartialEq)]
pub struct Simulation {
    pub run: Run,
    pub truth: Truth,
    pub stats: Stats,
}

/// An observable compiled for evaluation and sampling.
pub(super) struct Compiled {
    pub(super) terms: Vec<(PauliString, f64)>,
    /// Per site: the measured letter (`I` if not measured).
    pub(super) basis: Vec<char>,
    pub(super) single: bool,
}

impl Compiled {
    fn new(spec: &ObservableSpec, n: usize) -> Compiled {
        let mut basis = vec!['I'; n];
        let terms = spec
            .terms
            .iter()
            .map(|t| {
                for (c, &s) in t.letters.chars().zip(&t.sites) {
                    basis[s] = c;
                }
                let p = PauliString::from_letters(&t.letters, &t.sites)
                    .unwrap_or(PauliString::IDENTITY);
                (p, t.weight)
            })
            .collect();
        Compiled {
            terms,
            basis,
            single: !spec.averaged,
        }
    }

    fn exact(&self, psi: &[Complex64]) -> f64 {
        self.terms.iter().map(|(p, w)| w * p.expectation(psi)).sum()
    }

    /// The value of the observable on a basis state of the rotated (measurement) basis.
    pub(super) fn outcome(&self, b: u64) -> f64 {
        self.terms
            .iter()
            .map(|(p, w)| w * parity_sign(b, p.support_mask()))
            .sum()
    }

    /// The state rotated so that measuring every site in Z measures this observable's basis
    /// (H for X; S† then H for Y).
    fn rotated(&self, psi: &[Complex64]) -> Vec<Complex64> {
        let mut v = psi.to_vec();
        let h = std::f64::consts::FRAC_1_SQRT_2;
        for (site, &c) in self.basis.iter().enumerate() {
            if c != 'X' && c != 'Y' {
                continue;
            }
            let bit = 1usize << site;
            for b in 0..v.len() {
                if b & bit != 0 {
                    continue;
                }
                let (mut a0, mut a1) = (v[b], v[b | bit]);
                if c == 'Y' {
                    a1 *= Complex64::new(0.0, -1.0); // S† = diag(1, −i)
                }
                let s0 = (a0 + a1) * h;
                let s1 = (a0 - a1) * h;
                a0 = s0;
                a1 = s1;
                v[b] = a0;
                v[b | bit] = a1;
            }
        }
        v
    }

    /// Mean of `shots` outcomes on `psi`.
    fn shot_mean(&self, rng: &mut impl RngCore, psi: &[Complex64], exact: f64, shots: u64) -> f64 {
        self.shot_tally(rng, psi, exact, shots).mean(shots)
    }

    /// `shots` outcomes on `psi`, as a count of `+1` (Pauli product) or a sum (weighted sum).
    fn shot_tally(
        &self,
        rng: &mut impl RngCore,
        psi: &[Complex64],
        exact: f64,
        shots: u64,
    ) -> Tally {
        if self.single {
            return Tally::Plus(sample::pauli_plus_count(rng, shots, exact));
        }
        let rotated = self.rotated(psi);
        let states = sample::sample_basis_states(rng, &rotated, shots);
        Tally::Sum(states.iter().map(|&b| self.outcome(b)).sum::<f64>())
    }
}

/// Shot outcomes pooled over flip patterns: `+1` counts of a Pauli product (exact integers) or
/// the sum of the values of a weighted sum (added in pattern order).
#[derive(Debug, Clone, Copy, PartialEq)]
enum Tally {
    Empty,
    Plus(u64),
    Sum(f64),
}

impl Tally {
    /// Adds the outcomes of more shots; the first addition keeps the value as it is.
    fn add(self, more: Tally) -> Tally {
        match (self, more) {
            (Tally::Empty, x) | (x, Tally::Empty) => x,
            (Tally::Plus(a), Tally::Plus(b)) => Tally::Plus(a + b),
            (Tally::Sum(a), Tally::Sum(b)) => Tally::Sum(a + b),
            // One observable is always tallied the same way.
            (x, _) => x,
        }
    }

    /// The mean over `shots` shots: `2k/S − 1` for a count, `sum/S` for a sum.
    fn mean(self, shots: u64) -> f64 {
        match self {
            Tally::Plus(k) => 2.0 * k as f64 / shots as f64 - 1.0,
            Tally::Sum(x) => x / shots as f64,
            Tally::Empty => 0.0,
        }
    }
}

/// The exact eigenvalue range of `Σ_a w_a P_a` for products in one product basis, by
/// enumerating the bit strings of the union of the supports.
pub fn spectrum_of_terms(terms: &[(Vec<usize>, f64)]) -> [f64; 2] {
    let mut sites: Vec<usize> = terms.iter().flat_map(|(s, _)| s.iter().copied()).collect();
    sites.sort_unstable();
    sites.dedup();
    let masks: Vec<(u64, f64)> = terms
        .iter()
        .map(|(s, w)| {
            let m = s.iter().fold(0u64, |m, site| {
                m | (1u64 << sites.binary_search(site).unwrap_or(0))
            });
            (m, *w)
        })
        .collect();
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for b in 0..(1u64 << sites.len()) {
        let v: f64 = masks.iter().map(|(m, w)| w * parity_sign(b, *m)).sum();
        lo = lo.min(v);
        hi = hi.max(v);
    }
    [lo, hi]
}

/// Half the spread of one XXZ bond term `XX + YY + Δ ZZ` (eigenvalues Δ, Δ, 2 − Δ, −2 − Δ).
pub fn bond_half_spread(anisotropy: f64) -> f64 {
    let d = anisotropy;
    let max = d.max(2.0 - d);
    let min = d.min(-2.0 - d);
    0.5 * (max - min)
}

/// The amplitudes `(⟨0|ψ⟩, ⟨1|ψ⟩)` of a single-site state.
pub fn site_ket(l: SiteState) -> [Complex64; 2] {
    let h = std::f64::consts::FRAC_1_SQRT_2;
    match l {
        SiteState::Zero => [Complex64::new(1.0, 0.0), Complex64::new(0.0, 0.0)],
        SiteState::One => [Complex64::new(0.0, 0.0), Complex64::new(1.0, 0.0)],
        SiteState::Plus => [Complex64::new(h, 0.0), Complex64::new(h, 0.0)],
        SiteState::Minus => [Complex64::new(h, 0.0), Complex64::new(-h, 0.0)],
        SiteState::PlusI => [Complex64::new(h, 0.0), Complex64::new(0.0, h)],
        SiteState::MinusI => [Complex64::new(h, 0.0), Complex64::new(0.0, -h)],
    }
}

/// The product state of `labels`, site `i` = bit `i`.
pub fn product_state(labels: &[SiteState]) -> Vec<Complex64> {
    let mut psi = vec![Complex64::new(1.0, 0.0)];
    for (i, &l) in labels.iter().enumerate() {
        let [a0, a1] = site_ket(l);
        let half = 1usize << i;
        let mut next = vec![Complex64::new(0.0, 0.0); half * 2];
        for (b, &amp) in psi.iter().enumerate() {
            next[b] = amp * a0;
            next[b | half] = amp * a1;
        }
        psi = next;
    }
    psi
}

/// The labels with X applied on the sites set in `mask` (up to global phases, see
/// [`SiteState::flipped`]).
pub fn flipped_labels(labels: &[SiteState], mask: u64) -> Vec<SiteState> {
    labels
        .iter()
        .enumerate()
        .map(|(i, &l)| if mask >> i & 1 == 1 { l.flipped() } else { l })
        .collect()
}

/// Adds `coefficient · V` for a noise operator on `support`.
pub fn add_noise_term(h: &mut PauliSum, op: NoiseOperator, support: &[usize], coefficient: f64) {
    let single = |l: char| PauliString::single(l, support[0]);
    let pair = |l: &str| PauliString::from_letters(l, &support[..2]);
    let mut put = |p: Option<PauliString>, c: f64| {
        if let Some(p) = p {
            h.add(p, c);
        }
    };
    match op {
        NoiseOperator::X => put(single('X'), coefficient),
        NoiseOperator::Y => put(single('Y'), coefficient),
        NoiseOperator::Z => put(single('Z'), coefficient),
        NoiseOperator::N => {
            put(Some(PauliString::IDENTITY), 0.5 * coefficient);
            put(single('Z'), -0.5 * coefficient);
        }
        NoiseOperator::XX => put(pair("XX"), coefficient),
        NoiseOperator::YY => put(pair("YY"), coefficient),
        NoiseOperator::ZZ => put(pair("ZZ"), coefficient),
        NoiseOperator::XxPlusYy => {
            put(pair("XX"), coefficient);
            put(pair("YY"), coefficient);
        }
    }
}

/// The target Hamiltonian of a scenario, in rad per its time unit.
pub fn target_hamiltonian(s: &Scenario) -> PauliSum {
    let f = s.energy_unit.factor_to_angular(s.time_unit);
    let j: Vec<f64> = s.coupling.iter().map(|x| x * f).collect();
    let hx: Vec<f64> = s.hx.iter().map(|x| x * f).collect();
    let hz: Vec<f64> = s.hz.iter().map(|x| x * f).collect();
    PauliSum::xxz(s.lattice.bonds(), &j, s.anisotropy, &hx, &hz)
}

/// The expanded true noise of a scenario.
pub fn true_instances(s: &Scenario) -> Vec<TrueInstance> {
    let unit = s.true_noise.frequency_unit;
    let mut out = Vec::new();
    for (k, (src, &op)) in s
        .true_noise
        .sources
        .iter()
        .zip(&s.true_operators)
        .enumerate()
    {
        let supports = instance_supports(&src.acts_on, &s.lattice);
        for (j, support) in supports.into_iter().enumerate() {
            let a = match &src.amplitude {
                Amplitude::Scalar(a) => *a,
                Amplitude::PerInstance(v) => v.get(j).copied().unwrap_or(0.0),
            };
            out.push(TrueInstance {
                source: k,
                support,
                operator: op,
                amplitude: unit.to_angular(a, s.time_unit),
                mean_offset: src.mean_offset,
                family: src.family,
                correlation_time: src
                    .correlation_time
                    .map(|(tau, unit)| tau * unit.factor_to(s.time_unit)),
            });
        }
    }
    out
}

/// One evolution through all recorded times; calls `at(k, ψ)` at every time.
fn trajectory(
    h: &Operator,
    psi0: &[Complex64],
    times: &[f64],
    stats: &mut Stats,
    at: impl FnMut(usize, &[Complex64]),
) {
    piecewise_trajectory(h, &[], |_| None, psi0, times, stats, at);
}

/// One evolution under `first`, switched at each time of `edges` (increasing) to the operator
/// `next(j)` gives for edge `j` (`None`: keep the current one); calls `at(k, ψ)` at every
/// recorded time (a recorded time on an edge sees the state before the switch). Without edges
/// this is the static evolution, step for step.
fn piecewise_trajectory(
    first: &Operator,
    edges: &[f64],
    mut next: impl FnMut(usize) -> Option<Operator>,
    psi0: &[Complex64],
    times: &[f64],
    stats: &mut Stats,
    mut at: impl FnMut(usize, &[Complex64]),
) {
    let mut psi = psi0.to_vec();
    let mut work = Workspace::default();
    let mut switched: Option<Operator> = None;
    let mut now = 0.0;
    let mut bound = 0.0;
    let mut drift = 0.0f64;
    let mut next_edge = 0;
    for (k, &t) in times.iter().enumerate() {
        while next_edge < edges.len() && edges[next_edge] < t {
            let edge = edges[next_edge];
            let h = switched.as_ref().unwrap_or(first);
            let rep = evolve(h, &mut psi, edge - now, DEFAULT_TOLERANCE, &mut work);
            now = edge;
            stats.products += rep.products;
            bound += rep.truncation_bound;
            if let Some(op) = next(next_edge) {
                switched = Some(op);
            }
            next_edge += 1;
        }
        let h = switched.as_ref().unwrap_or(first);
        let rep = evolve(h, &mut psi, t - now, DEFAULT_TOLERANCE, &mut work);
        now = t;
        stats.products += rep.products;
        bound += rep.truncation_bound;
        drift = drift.max((super::propagate::norm(&psi) - 1.0).abs());
        at(k, &psi);
    }
    stats.evolutions += 1;
    stats.max_truncation_bound = stats.max_truncation_bound.max(bound);
    stats.max_norm_drift = stats.max_norm_drift.max(drift);
}

/// The window edges of the true noise inside `(0, t_max)`: every multiple `kτ` (k ≥ 1) of a
/// windowed instance's correlation time below `t_max`, in increasing order, with the instances
/// drawn again there (instance order). Empty when no instance has a correlation time below
/// `t_max`: then the simulation is exactly the static one.
pub(super) fn window_edges(inst: &[TrueInstance], t_max: f64) -> Vec<(f64, Vec<usize>)> {
    let mut edges: BTreeMap<u64, (f64, Vec<usize>)> = BTreeMap::new();
    for (i, x) in inst.iter().enumerate() {
        let Some(tau) = x.correlation_time else {
            continue;
        };
        if tau.is_nan() || tau <= 0.0 {
            continue;
        }
        let mut k = 1.0f64;
        while k * tau < t_max {
            let t = k * tau;
            // Non-negative floats order like their bits.
            edges
                .entry(t.to_bits())
                .or_insert((t, Vec::new()))
                .1
                .push(i);
            k += 1.0;
        }
    }
    edges.into_values().collect()
}

/// The draws at every window edge (edge order, then instance order), from `rng`.
pub(super) fn draw_windows(
    rng: &mut impl RngCore,
    edges: &[(f64, Vec<usize>)],
    inst: &[TrueInstance],
) -> Vec<Vec<f64>> {
    edges
        .iter()
        .map(|(_, who)| {
            who.iter()
                .map(|&i| sample::draw(rng, &inst[i].family))
                .collect()
        })
        .collect()
}

/// One evolution under noise that is drawn again at the window edges: `h` (built from `g`)
/// holds until the first edge, then each edge's draws replace their instances' values.
#[allow(clippy::too_many_arguments)]
fn windowed_trajectory(
    h: &Operator,
    (base, inst, n): (&PauliSum, &[TrueInstance], usize),
    g: &[f64],
    edges: &[(f64, Vec<usize>)],
    draws: &[Vec<f64>],
    psi0: &[Complex64],
    times: &[f64],
    stats: &mut Stats,
    at: impl FnMut(usize, &[Complex64]),
) {
    let edge_times: Vec<f64> = edges.iter().map(|(t, _)| *t).collect();
    let mut current = g.to_vec();
    let next = |j: usize| {
        for (&i, &v) in edges[j].1.iter().zip(&draws[j]) {
            current[i] = v;
        }
        Some(noisy_operator(base, inst, &current, n))
    };
    piecewise_trajectory(h, &edge_times, next, psi0, times, stats, at);
}

pub(super) struct RealizationResult {
    pub(super) values: Vec<Array2<f64>>, // per observable: 1 × T shot means
    pub(super) exact: Vec<Vec<f64>>,     // per observable: T
    pub(super) draws: Vec<Vec<f64>>,     // rows of g
    pub(super) patterns: Vec<PatternRow>,
    pub(super) stats: Stats,
}

/// A realization after its random draws for the noise and the preparation, before evolution.
struct Prepared {
    rng: rand_chacha::ChaCha20Rng,
    g: Vec<f64>,
    /// The draws at the window edges (empty for static noise).
    windows: Vec<Vec<f64>>,
    /// Flip pattern → shots.
    patterns: BTreeMap<u64, u64>,
}

pub(super) fn noisy_operator(
    base: &PauliSum,
    inst: &[TrueInstance],
    g: &[f64],
    n: usize,
) -> Operator {
    let mut h = base.clone();
    for (i, gi) in inst.iter().zip(g) {
        add_noise_term(
            &mut h,
            i.operator,
            &i.support,
            i.amplitude * (i.mean_offset + gi),
        );
    }
    Operator::compile(&h, n)
}

/// Runs the simulation of `s` with `seed`, with as many evolutions as the drawn flip patterns
/// need (see [`try_simulate`] for the capped version the command line uses).
pub fn simulate(s: &Scenario, seed: u64) -> Simulation {
    match run_simulation(s, seed, None) {
        Ok(sim) => sim,
        Err(p) => unreachable!("only a cap makes a simulation fail: {p}"),
    }
}

/// Runs the simulation of `s` with `seed`, but refuses (before any evolution) when a
/// preparation error needs more than [`MAX_PATTERN_EVOLUTIONS`] evolutions of flipped states
/// (realizations × distinct flip patterns). The problem is at the scenario's
/// `/preparation_error/flip_probability`.
pub fn try_simulate(s: &Scenario, seed: u64) -> Result<Simulation, Problem> {
    run_simulation(s, seed, Some(MAX_PATTERN_EVOLUTIONS))
}

fn run_simulation(s: &Scenario, seed: u64, cap: Option<u64>) -> Result<Simulation, Problem> {
    let start = Instant::now();
    let n = s.lattice.n_sites();
    let t_count = s.times.len();
    let base = target_hamiltonian(s);
    let instances = true_instances(s);
    let compiled: Vec<Compiled> = s.observables.iter().map(|o| Compiled::new(o, n)).collect();
    let psi0 = product_state(&s.initial_state);
    let mut stats = Stats::default();
    let q = s.preparation_error.map_or(0.0, |p| p.flip_probability);
    let recorded = s.preparation_error.is_some();
    let initial = |mask: u64| {
        if mask == 0 {
            psi0.clone()
        } else {
            product_state(&flipped_labels(&s.initial_state, mask))
        }
    };

    // Ideal trace.
    let ideal_op = Operator::compile(&base, n);
    let mut ideal = vec![vec![0.0; t_count]; compiled.len()];
    trajectory(&ideal_op, &psi0, &s.times, &mut stats, |k, psi| {
        for (o, c) in compiled.iter().enumerate() {
            ideal[o][k] = c.exact(psi);
        }
    });

    let redrawn = s.true_noise.redrawn;
    // Window edges of noise drawn again during an evolution (none: the static simulation,
    // which draws exactly the numbers it drew before correlation times existed).
    let t_max = s.times.iter().fold(0.0f64, |m, &t| m.max(t));
    let edges = window_edges(&instances, t_max);
    if !edges.is_empty() && !s.noise.device.is_empty() {
        return Err(Problem::new(
            "/noise",
            "has device sections and a source with a correlation_time below the last time; the \
             simulator does not evolve density matrices under windowed noise: remove one of the \
             two (or make the correlation time at least the last time)",
        ));
    }
    let (once, once_windows): (Vec<f64>, Vec<Vec<f64>>) = {
        let mut rng = sample::stream(seed, sample::ONCE_STREAM);
        let g = instances
            .iter()
            .map(|i| sample::draw(&mut rng, &i.family))
            .collect();
        (g, draw_windows(&mut rng, &edges, &instances))
    };
    // One evolution: static, or with the windows' draws.
    let evolve_one = |h: &Operator,
                      g: &[f64],
                      windows: &[Vec<f64>],
                      psi0: &[Complex64],
                      st: &mut Stats,
                      at: &mut dyn FnMut(usize, &[Complex64])| {
        if edges.is_empty() {
            trajectory(h, psi0, &s.times, st, at);
        } else {
            windowed_trajectory(
                h,
                (&base, &instances, n),
                g,
                &edges,
                windows,
                psi0,
                &s.times,
                st,
                at,
            );
        }
    };
    let shots = s.shots;
    let k_obs = compiled.len();
    let device = (!s.noise.device.is_empty()).then(|| {
        let names: Vec<&str> = s.observables.iter().map(|o| o.name.as_str()).collect();
        DeviceTruth::new(&s.noise.device, n, s.time_unit, &names)
    });
    // Progress on a terminal only (crate::progress); counts finished realizations.
    let task = crate::progress::Task::start("simulate: realizations", s.realizations as u64);
    let results: Vec<RealizationResult> = if let Some(truth) = &device {
        // Device errors: density matrices (docs/simulator.md, "Device errors"); the scenario
        // reader has refused noise redrawn every shot and a preparation_error key here.
        let setup = OpenSetup {
            s,
            base: &base,
            instances: &instances,
            compiled: &compiled,
            truth,
            once: &once,
            seed,
        };
        (0..s.realizations)
            .into_par_iter()
            .map(|r| setup.realization(r))
            .inspect(|_| task.inc(1))
            .collect()
    } else if redrawn == Redrawn::EveryShot {
        (0..s.realizations)
            .into_par_iter()
            .map(|r| {
                let mut rng = sample::realization_stream(seed, r);
                let mut st = Stats::default();
                let mut values = vec![Array2::<f64>::zeros((1, t_count)); k_obs];
                let mut exact = vec![vec![0.0; t_count]; k_obs];
                let mut draws = Vec::new();
                let mut patterns = Vec::new();
                let mut sums = vec![vec![0.0; t_count]; k_obs];
                for _ in 0..shots {
                    let g: Vec<f64> = instances
                        .iter()
                        .map(|i| sample::draw(&mut rng, &i.family))
                        .collect();
                    let mask = if q > 0.0 {
                        let p = sample::flip_pattern_counts(&mut rng, n, 1, q);
                        p.keys().next().copied().unwrap_or(0)
                    } else {
                        0
                    };
                    if recorded {
                        patterns.push(PatternRow {
                            realization: r,
                            mask,
                            shots: 1,
                        });
                        st.flip_patterns += usize::from(mask != 0);
                    }
                    let windows = draw_windows(&mut rng, &edges, &instances);
                    let h = noisy_operator(&base, &instances, &g, n);
                    evolve_one(&h, &g, &windows, &initial(mask), &mut st, &mut |k, psi| {
                        for (o, c) in compiled.iter().enumerate() {
                            let e = c.exact(psi);
                            exact[o][k] += e;
                            sums[o][k] += c.shot_mean(&mut rng, psi, e, 1);
                        }
                    });
                    draws.push(g);
                }
                for o in 0..k_obs {
                    for k in 0..t_count {
                        exact[o][k] /= shots as f64;
                        values[o][[0, k]] = sums[o][k] / shots as f64;
                    }
                }
                RealizationResult {
                    values,
                    exact,
                    draws,
                    patterns,
                    stats: st,
                }
            })
            .inspect(|_| task.inc(1))
            .collect()
    } else {
        // First every realization's draws (noise, then flip patterns), so that the number of
        // evolutions is known before any is made; then the evolutions and the shots, which
        // continue each realization's stream where the draws left it.
        let total = AtomicU64::new(0);
        let over = AtomicBool::new(false);
        let prepared: Vec<Option<Prepared>> = (0..s.realizations)
            .into_par_iter()
            .map(|r| {
                if over.load(Ordering::Relaxed) {
                    return None;
                }
                let mut rng = sample::realization_stream(seed, r);
                let (g, windows): (Vec<f64>, Vec<Vec<f64>>) = if redrawn == Redrawn::Once {
                    (once.clone(), once_windows.clone())
                } else {
                    let g = instances
                        .iter()
                        .map(|i| sample::draw(&mut rng, &i.family))
                        .collect();
                    (g, draw_windows(&mut rng, &edges, &instances))
                };
                let patterns = if q > 0.0 {
                    sample::flip_pattern_counts(&mut rng, n, shots, q)
                } else {
                    BTreeMap::from([(0, shots)])
                };
                if let Some(cap) = cap {
                    let count = patterns.len() as u64;
                    if total.fetch_add(count, Ordering::Relaxed) + count > cap {
                        over.store(true, Ordering::Relaxed);
                    }
                }
                Some(Prepared {
                    rng,
                    g,
                    windows,
                    patterns,
                })
            })
            .collect();
        if over.load(Ordering::Relaxed) {
            return Err(Problem::new(
                "/preparation_error/flip_probability",
                format!(
                    "gives more than {} distinct flip patterns over all realizations, and each \
                     needs its own evolution; use fewer shots or realizations, or a smaller \
                     flip probability",
                    cap.unwrap_or(u64::MAX)
                ),
            ));
        }
        prepared
            .into_par_iter()
            .enumerate()
            .map(|(r, prep)| {
                let Some(Prepared {
                    mut rng,
                    g,
                    windows,
                    patterns,
                }) = prep
                else {
                    unreachable!("every realization is prepared when none is over the cap")
                };
                let mut st = Stats::default();
                let mut values = vec![Array2::<f64>::zeros((1, t_count)); k_obs];
                let mut exact = vec![vec![0.0; t_count]; k_obs];
                let mut tally = vec![vec![Tally::Empty; t_count]; k_obs];
                let alone = patterns.len() == 1;
                let h = noisy_operator(&base, &instances, &g, n);
                for (&mask, &count) in &patterns {
                    evolve_one(&h, &g, &windows, &initial(mask), &mut st, &mut |k, psi| {
                        for (o, c) in compiled.iter().enumerate() {
                            let e = c.exact(psi);
                            if alone {
                                exact[o][k] = e;
                            } else {
                                exact[o][k] += count as f64 * e;
                            }
                            tally[o][k] = tally[o][k].add(c.shot_tally(&mut rng, psi, e, count));
                        }
                    });
                }
                for o in 0..k_obs {
                    for k in 0..t_count {
                        if !alone {
                            exact[o][k] /= shots as f64;
                        }
                        values[o][[0, k]] = tally[o][k].mean(shots);
                    }
                }
                if q > 0.0 {
                    st.flip_patterns += patterns.len();
                }
                let rows = if recorded {
                    patterns
                        .iter()
                        .map(|(&mask, &count)| PatternRow {
                            realization: r,
                            mask,
                            shots: count,
                        })
                        .collect()
                } else {
                    Vec::new()
                };
                let draws = if redrawn == Redrawn::EveryRealization || r == 0 {
                    vec![g]
                } else {
                    Vec::new()
                };
                RealizationResult {
                    values,
                    exact,
                    draws,
                    patterns: rows,
                    stats: st,
                }
            })
            .inspect(|_| task.inc(1))
            .collect()
    };

    let r_count = s.realizations;
    let mut draw_rows: Vec<&Vec<f64>> = Vec::new();
    let mut pattern_rows: Vec<PatternRow> = Vec::new();
    for res in &results {
        stats.evolutions += res.stats.evolutions;
        stats.products += res.stats.products;
        stats.flip_patterns += res.stats.flip_patterns;
        stats.generator_applications += res.stats.generator_applications;
        stats.max_truncation_bound = stats
            .max_truncation_bound
            .max(res.stats.max_truncation_bound);
        stats.max_norm_drift = stats.max_norm_drift.max(res.stats.max_norm_drift);
        draw_rows.extend(res.draws.iter());
        pattern_rows.extend(res.patterns.iter().copied());
    }
    let draws = if draw_rows.len() * instances.len() <= MAX_STORED_SHOT_DRAWS {
        let mut a = Array2::zeros((draw_rows.len(), instances.len()));
        for (i, row) in draw_rows.iter().enumerate() {
            for (j, &g) in row.iter().enumerate() {
                a[[i, j]] = g;
            }
        }
        Some(a)
    } else {
        None
    };
    let preparation = s.preparation_error.map(|p| PreparationTruth {
        flip_probability: p.flip_probability,
        patterns: (pattern_rows.len().saturating_mul(n) <= MAX_STORED_SHOT_DRAWS)
            .then_some(pattern_rows),
    });

    let mut observables = Vec::new();
    let mut truth_obs = Vec::new();
    for (o, spec) in s.observables.iter().enumerate() {
        let mut values = Array2::zeros((r_count, t_count));
        let mut exact = Array2::zeros((r_count, t_count));
        for (r, res) in results.iter().enumerate() {
            for k in 0..t_count {
                values[[r, k]] = res.values[o][[0, k]];
                exact[[r, k]] = res.exact[o][k];
            }
        }
        let mut support: Vec<usize> = spec.terms.iter().flat_map(|t| t.sites.clone()).collect();
        support.sort_unstable();
        support.dedup();
        let term_list: Vec<(Vec<usize>, f64)> = spec
            .terms
            .iter()
            .map(|t| (t.sites.clone(), t.weight))
            .collect();
        let [lo, hi] = if spec.averaged {
            spectrum_of_terms(&term_list)
        } else {
            [-1.0, 1.0]
        };
        let description = describe(spec, n);
        observables.push(Observable {
            name: spec.name.clone(),
            values,
            shots: Shots::Uniform(s.shots),
            stderr: None,
            ideal: Some(ideal[o].clone()),
            support,
            spectrum_min: lo,
            spectrum_max: hi,
            description: Some(description),
            terms: spec.averaged.then(|| Terms {
                supports: spec.terms.iter().map(|t| t.sites.clone()).collect(),
                weights: spec.terms.iter().map(|t| t.weight).collect(),
                spectra: vec![[-1.0, 1.0]; spec.terms.len()],
            }),
            two_outcomes: spec.two_outcomes,
        });
        truth_obs.push(TruthObservable {
            name: spec.name.clone(),
            exact,
            ideal: ideal[o].clone(),
        });
    }

    let half = bond_half_spread(s.anisotropy);
    let norms: Vec<f64> = s.coupling.iter().map(|j| j.abs() * half).collect();
    let bond_norm_max = norms.iter().copied().fold(0.0, f64::max);
    let how = match s.preparation_error {
        // q = 0 changes nothing in the data, so the run file stays as without the key.
        Some(p) if p.flip_probability > 0.0 => format!(
            "quassay simulate, exact state vector, seed {seed}, every site's initial state \
             flipped with probability {} in every shot",
            p.flip_probability
        ),
        _ if device.is_some() => format!(
            "quassay simulate, exact density matrix, seed {seed}, with the noise record's \
             device errors at their central values"
        ),
        _ => format!("quassay simulate, exact state vector, seed {seed}"),
    };
    let description = match &s.description {
        Some(d) => format!("Simulated data from an invented scenario ({how}): {d}"),
        None => format!("Simulated data from an invented scenario ({how})"),
    };
    let run = Run {
        run_id: s.run_id.clone(),
        time_unit: s.time_unit,
        description: Some(description),
        times: s.times.clone(),
        lattice: s.lattice.clone(),
        hamiltonian: Hamiltonian {
            energy_unit: s.energy_unit,
            bond_norm_max,
            bond_norms: (!s.coupling_uniform).then_some(norms),
            interaction_range: 1,
        },
        observables,
    };
    stats.seconds = start.elapsed().as_secs_f64();
    Ok(Simulation {
        run,
        truth: Truth {
            seed,
            redrawn,
            instances,
            observables: truth_obs,
            draws,
            preparation,
        },
        stats,
    })
}

/// The Pauli string of a product over all sites (site 0 first), or a description of a sum.
fn describe(spec: &ObservableSpec, n: usize) -> String {
    let full = |letters: &str, sites: &[usize]| {
        let mut v = vec!['I'; n];
        for (c, &s) in letters.chars().zip(sites) {
            v[s] = c;
        }
        v.into_iter().collect::<String>()
    };
    if !spec.averaged {
        let t = &spec.terms[0];
        return full(&t.letters, &t.sites);
    }
    let parts: Vec<String> = spec
        .terms
        .iter()
        .map(|t| format!("{:+}*{}", t.weight, full(&t.letters, &t.sites)))
        .collect();
    parts.join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bond_half_spread_is_two_for_unit_anisotropy_one_half() {
        // Eigenvalues of XX + YY + 0.5 ZZ: 0.5, 0.5, 1.5, −2.5 → spread 4, half 2.
        assert_eq!(bond_half_spread(0.5), 2.0);
        assert_eq!(bond_half_spread(0.0), 2.0);
        // Δ = 1 (Heisenberg): 1, 1, 1, −3 → half spread 2; Δ = −2: −2, −2, 4, 0 → 3.
        assert_eq!(bond_half_spread(1.0), 2.0);
        assert_eq!(bond_half_spread(-2.0), 3.0);
    }

    #[test]
    fn staggered_magnetisation_of_four_sites_spans_minus_one_to_one() {
        let terms: Vec<(Vec<usize>, f64)> = (0..4)
            .map(|i| (vec![i], if i % 2 == 0 { 0.25 } else { -0.25 }))
            .collect();
        assert_eq!(spectrum_of_terms(&terms), [-1.0, 1.0]);
        // Z0Z1 + Z0 takes the values 2, 0, −2, 0 on (z0, z1) = (1, 1), (1, −1), (−1, 1), (−1, −1).
        assert_eq!(
            spectrum_of_terms(&[(vec![0, 1], 1.0), (vec![0], 1.0)]),
            [-2.0, 2.0]
        );
        // Terms that cancel: Z0Z1 − Z0Z1 + 0.5 Z2 has the values ±0.5 only (not ±2.5).
        assert_eq!(
            spectrum_of_terms(&[(vec![0, 1], 1.0), (vec![0, 1], -1.0), (vec![2], 0.5)]),
            [-0.5, 0.5]
        );
    }

    #[test]
    fn rotation_maps_the_measured_basis_to_z() {
        // |+i⟩ measured in Y gives +1 always; |+⟩ measured in X gives +1 always.
        let spec = |p: &str| ObservableSpec {
            name: "o".into(),
            terms: vec![crate::inputs::scenario::ObservableTerm {
                letters: p.into(),
                sites: vec![0],
                weight: 1.0,
            }],
            averaged: true,
            two_outcomes: false,
        };
        for (p, st) in [
            ("Y", SiteState::PlusI),
            ("X", SiteState::Plus),
            ("Z", SiteState::Zero),
        ] {
            let c = Compiled::new(&spec(p), 1);
            let psi = product_state(&[st]);
            let mut rng = sample::stream(3, 3);
            assert_eq!(c.shot_mean(&mut rng, &psi, 1.0, 50), 1.0, "{p}");
            assert!((c.exact(&psi) - 1.0).abs() < 1e-15);
        }
    }

    /// `P|ψ⟩` for a Pauli string, from its action on basis states.
    fn apply(p: &PauliString, psi: &[Complex64]) -> Vec<Complex64> {
        let mut out = vec![Complex64::new(0.0, 0.0); psi.len()];
        for (b, &a) in psi.iter().enumerate() {
            let (c, phase) = p.apply_to_basis(b as u64);
            out[c as usize] += phase * a;
        }
        out
    }

    #[test]
    fn a_flipped_product_state_is_x_on_the_flipped_sites_up_to_a_phase() {
        // Definition: the flip is X on the site. |⟨flipped | X_mask ψ⟩| = 1 means equal up to
        // a global phase.
        let labels: Vec<SiteState> = SiteState::ALL.iter().map(|(l, _)| *l).collect();
        let psi = product_state(&labels);
        for mask in [0u64, 0b1, 0b100110, 0b111111, 0b010001] {
            let sites: Vec<usize> = (0..6).filter(|i| mask >> i & 1 == 1).collect();
            let letters = "X".repeat(sites.len());
            let x = PauliString::from_letters(&letters, &sites).unwrap_or(PauliString::IDENTITY);
            let want = apply(&x, &psi);
            let got = product_state(&flipped_labels(&labels, mask));
            let overlap: Complex64 = got.iter().zip(&want).map(|(a, b)| a.conj() * b).sum();
            assert!((overlap.norm() - 1.0).abs() < 1e-14, "{mask:b}: {overlap}");
        }
    }

    /// An invented scenario with `sites` sites, no coupling, no noise (amplitude 0), all in
    /// `|0⟩`, observables `Z_0` and the mean magnetisation.
    fn idle(sites: usize, q: f64, realizations: usize, shots: u64) -> Scenario {
        let text = format!(
            r#"{{"format": "quassay-scenario", "format_version": 1, "run_id": "invented-idle",
            "time_unit": "us", "energy_unit": "MHz",
            "lattice": {{"geometry": "chain", "shape": [{sites}], "boundary": "open"}},
            "hamiltonian": {{"J": 0.0, "anisotropy": 0.0}},
            "initial_state": "0", "times": [0.0, 1.0],
            "observables": [{{"name": "Z_0", "pauli": "Z", "sites": [0]}},
              {{"name": "m", "pauli": "Z", "over": "each_site"}}],
            "realizations": {realizations}, "shots": {shots}, "seed": 5,
            "preparation_error": {{"flip_probability": {q}}},
            "noise": {{"format": "quassay-noise", "format_version": 1,
              "frequency_unit": "kHz", "redrawn": "every_realization",
              "sources": [{{"name": "d", "acts_on": "each_site", "operator": "Z",
                "amplitude": 0.0, "distribution": {{"family": "uniform"}},
                "mean_offset": 0.0, "mean_offset_uncertainty": 0.0}}]}}}}"#
        );
        crate::inputs::scenario::parse_scenario(&text).unwrap()
    }

    #[test]
    fn too_many_flip_patterns_are_refused_before_any_evolution() {
        // 3 realizations × (2^4 patterns, almost surely all drawn with q = 0.5 and 1000 shots:
        // each is missed with probability (15/16)^1000 < 1e-28) = 48 > 20.
        let s = idle(4, 0.5, 3, 1000);
        let p = run_simulation(&s, 5, Some(20)).unwrap_err();
        assert_eq!(p.path, "/preparation_error/flip_probability");
        assert!(p.message.contains("more than 20"), "{}", p.message);
        let sim = run_simulation(&s, 5, Some(48)).unwrap();
        assert_eq!(sim.stats.flip_patterns, 48);
        // One ideal evolution and one per pattern.
        assert_eq!(sim.stats.evolutions, 49);
    }

    #[test]
    fn q_zero_draws_nothing_and_q_one_flips_every_site() {
        let zero = simulate(&idle(3, 0.0, 2, 10), 5);
        let none = {
            let mut s = idle(3, 0.0, 2, 10);
            s.preparation_error = None;
            simulate(&s, 5)
        };
        assert_eq!(zero.run, none.run);
        let rows = zero.truth.preparation.unwrap().patterns.unwrap();
        assert_eq!(rows.len(), 2);
        assert!(rows.iter().all(|r| r.mask == 0 && r.shots == 10));
        // q = 1: every shot starts in |111⟩, so Z_0 = −1 and m = −1 exactly.
        let one = simulate(&idle(3, 1.0, 2, 10), 5);
        for o in &one.truth.observables {
            assert!(o.exact.iter().all(|&x| x == -1.0), "{}", o.name);
            assert!(o.ideal.iter().all(|&x| x == 1.0), "{}", o.name);
        }
        for o in &one.run.observables {
            assert!(o.values.iter().all(|&x| x == -1.0), "{}", o.name);
        }
    }
}
