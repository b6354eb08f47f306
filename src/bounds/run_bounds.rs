//! Every bound of a run at once: each observable at each recorded time, and the fidelity bound
//! at each time (docs/method.md §3–§5). Pure: it takes the checked models and returns numbers.
//!
//! Per observable and time the point reports one *statement*: the global one (§3), or the
//! light-cone one (§5) when it is smaller ([`super::local::combine`]). The walk graph is built
//! once per run; the exposure times are computed once per region shape and reused, to the bit,
//! by every support with the same shape: the same support again, or a translate on a uniform
//! lattice away from its boundary, whether it is an observable's support or a term of a sum
//! observable ([`ExposureCache`], within a memory budget, see [`EXPOSURE_BUDGET`]).
//! Observables that are sums of local terms get a third candidate, the term-by-term statement
//! ([`super::local::term_bounds`]): per source the smallest of the global, whole-support and
//! term-by-term sensitivities; the point reports the smallest of the three statements.
//!
//! The order of operations is fixed (observables in name order, times in order, realizations
//! in order), so the numbers, and hence the certificate, reproduce to the bit.

use std::collections::HashMap;

use super::confidence::{self, ConfidenceError, ConfidenceSplit, Simultaneity};
use super::data_statement::{observable_statement, DataInputs, DataStatement};
use super::device::{add_device, DeviceData, DeviceTerms, MAX_TERMS_BY_TERM};
use super::fidelity::{fidelity_bound, FidelityBound};
use super::global::{
    evaluate_point, shot_hoeffding, shot_hoeffding_from_sum, shot_normal_from_sum, PointBounds,
    PointInputs, ShotData, SourceData,
};
use super::light_cone::{
    site_instances, ExposureCache, InstanceIndex, SiteCone, Unavailable, WalkGraph,
};
use super::local::{
    combine_all, local_bounds_with, term_bounds_cached, LocalInputs, LocalTerms, Statement,
    TermByTerm,
};
use crate::model::noise::Instance;
use crate::model::{Hamiltonian, Lattice, NoiseModel, Run, Terms, TimeUnit};

pub use crate::model::sums::{ObservableSums, ShotSums};

/// Largest number of numbers (exposure values, region sources × times, plus the region
/// shapes, summed over the shapes kept) held for reuse: 2^24, 128 MiB. Past it the kept
/// shapes are dropped before a new one is stored; a dropped one is recomputed if needed, with
/// the same bits.
pub const EXPOSURE_BUDGET: usize = 1 << 24;

/// What the light-cone bounds need of a run besides the noise model.
#[derive(Debug, Clone, Copy)]
pub struct RunGeometry<'a> {
    pub lattice: &'a Lattice,
    pub hamiltonian: &'a Hamiltonian,
    /// The run's time unit (the bond norms are converted to radians per this unit).
    pub time_unit: TimeUnit,
}

/// Whether an observable got light-cone bounds, and why not when it did not.
#[derive(Debug, Clone, PartialEq)]
pub enum LightCone {
    /// Computed, with the walk order `K` and the number of sources in the computed region.
    Computed {
        order: usize,
        region_sources: usize,
        /// The observable is a sum of local terms: `Ok(A)` when the term-by-term statement
        /// was computed for its `A` terms, else why not.
        terms: Option<Result<usize, String>>,
    },
    /// Not available: the reason (a [`Unavailable`] text).
    Unavailable(String),
}

impl LightCone {
    /// The sentence the certificate records.
    pub fn describe(&self) -> String {
        match self {
            LightCone::Computed {
                order,
                region_sources,
                terms,
            } => {
                let mut s = format!(
                    "computed (Lieb-Robinson walk sums to order {order}, {region_sources} noise \
                     instances in the computed region, the others bounded by the tail); at each \
                     time the smaller statement is used"
                );
                match terms {
                    Some(Ok(a)) => s.push_str(&format!(
                        "; the observable is a sum of {a} local terms: each noise instance's \
                         sensitivity is the smallest of the global, whole-support and \
                         term-by-term forms (see term_by_term)"
                    )),
                    Some(Err(why)) => s.push_str(&format!(
                        "; the observable is a sum of local terms, but the term-by-term \
                         statement is not available ({why}): the light cone of its whole \
                         support (the union of the terms' supports) is used"
                    )),
                    None => {}
                }
                s
            }
            LightCone::Unavailable(why) => {
                format!("not available, the global statement is used at every time: {why}")
            }
        }
    }
}

/// The bounds of one observable over the recorded times.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableBounds {
    /// The observable's name.
    pub name: String,
    /// `s_O = spectrum_max − spectrum_min`.
    pub spread: f64,
    /// The reported value `v̄` per time: the mean over realizations.
    pub mean: Vec<f64>,
    /// Every term per time.
    pub points: Vec<PointBounds>,
    /// Whether the shot term is the normal approximation from standard errors.
    pub shot_approximate: bool,
    /// Per time, the statement `points` reports.
    pub statements: Vec<Statement>,
    /// Whether the light-cone statement was computed.
    pub light_cone: LightCone,
    /// Per time, `E_avg` of the global statement (equal to `points[k].e_avg` where it is used).
    pub e_avg_global: Vec<f64>,
    /// Per time, the light-cone terms, when computed.
    pub local: Option<Vec<LocalTerms>>,
    /// The term-by-term statement, when the observable is a sum of local terms and it was
    /// computed.
    pub term_by_term: Option<TermByTerm>,
    /// The data statement (docs/method.md §6), when asked for; the certified interval is then
    /// the intersection of [`ObservableBounds::interval`] and its interval.
    pub data: Option<DataStatement>,
    /// The device-error terms (docs/method.md §7), when the record has device sections; their
    /// total is already in `points` (`E_1`, `E_avg`, the half-width) and `e_avg_global`.
    pub device: Option<DeviceTerms>,
}

impl ObservableBounds {
    /// The model statement's interval for the ideal-model value at time index `k`.
    pub fn interval(&self, k: usize) -> [f64; 2] {
        let h = self.points[k].half_width;
        [self.mean[k] - h, self.mean[k] + h]
    }

    /// Computes the data statement (docs/method.md §6) from the observable's `R × T` values;
    /// `two_outcomes` holds the shots when every shot is declared to give one of the spectrum's
    /// two ends (the exact binomial interval then applies where the shots pool, §6.1).
    pub fn attach_data(
        &mut self,
        values: ndarray::ArrayView2<f64>,
        spectrum: [f64; 2],
        redrawn: crate::model::noise::Redrawn,
        alpha_point: f64,
        method: super::data_interval::MeanMethod,
        two_outcomes: Option<&crate::model::Shots>,
    ) {
        let model: Vec<[f64; 2]> = (0..self.points.len()).map(|k| self.interval(k)).collect();
        let inputs = DataInputs {
            spectrum,
            points: &self.points,
            local: self.local.as_deref(),
            model: &model,
            redrawn,
            alpha_point,
            method,
            two_outcomes,
            device: self.device.as_ref().map(|d| d.total.as_slice()),
        };
        self.data = Some(observable_statement(values, &inputs));
    }

    /// The certified interval at time index `k`: the model interval, intersected with the
    /// data statement's when there is one (`None` when the two are disjoint).
    pub fn certified(&self, k: usize) -> Option<[f64; 2]> {
        match &self.data {
            Some(d) => d.points[k].certified,
            None => Some(self.interval(k)),
        }
    }

    /// Per time, the light-cone Efron–Stein variance `Σ δ_i² σ_i² e_i²` of one draw (before the
    /// realization rule), when computed; see [`LocalTerms::v_noise`].
    ///
    /// With a term-by-term statement, the smaller of the two per time (both are upper bounds
    /// on the same variance, fixed before the data are seen).
    pub fn local_v_noise(&self) -> Option<Vec<f64>> {
        let local = self
            .local
            .as_ref()
            .map(|l| l.iter().map(|x| x.v_noise).collect::<Vec<f64>>())?;
        Some(match &self.term_by_term {
            Some(t) => local
                .iter()
                .zip(&t.points)
                .map(|(&a, b)| a.min(b.v_noise))
                .collect(),
            None => local,
        })
    }
}

/// All bounds of a run.
#[derive(Debug, Clone, PartialEq)]
pub struct RunBounds {
    /// How the confidence level was split.
    pub split: ConfidenceSplit,
    /// Per-source data, in instance order.
    pub sources: Vec<SourceData>,
    /// Per observable, in the run's order.
    pub observables: Vec<ObservableBounds>,
    /// Failure probability of the fidelity statement at each time.
    pub fidelity_p: f64,
    /// The fidelity lower bound per time.
    pub fidelity: Vec<FidelityBound>,
}

impl RunBounds {
    /// `(light-cone points, all points)` over every observable and time.
    pub fn statement_counts(&self) -> (usize, usize) {
        let mut local = 0;
        let mut all = 0;
        for o in &self.observables {
            all += o.statements.len();
            local += o
                .statements
                .iter()
                .filter(|s| **s != Statement::Global)
                .count();
        }
        (local, all)
    }

    /// Which statement the points use, in words (for the summary).
    pub fn statement_summary(&self) -> String {
        match self.statement_counts() {
            (0, _) => "global statement at every time".to_string(),
            (l, a) if l == a => "light-cone statement at every time".to_string(),
            (l, a) => format!("light-cone statement at {l} of {a} points, global elsewhere"),
        }
    }
}

/// Evaluates the bounds of a run one observable at a time (so a streaming reader can drop each
/// observable's data once it is summed).
///
/// The noise terms of a point depend on the observable only through `s_O` (the global
/// statement), so they are computed once per time and distinct `s_O` and reused, bit for bit:
/// the same function with the same inputs.
pub struct RunEvaluator<'a> {
    times: &'a [f64],
    noise: &'a NoiseModel,
    simultaneity: Simultaneity,
    split: ConfidenceSplit,
    /// Failure probability of the fidelity statement over all times: the model statement's ε
    /// unless [`RunEvaluator::set_fidelity_epsilon`] set the user's whole ε.
    fidelity_epsilon: f64,
    sources: Vec<SourceData>,
    /// Noise terms per time, by the bits of `s_O` (shot terms not yet filled in).
    noise_terms: Vec<(u64, Vec<PointBounds>)>,
    /// The run's walk graph, or why there is none (then every observable is global).
    graph: Result<WalkGraph<'a>, Unavailable>,
    /// The instances by site (for the region searches).
    index: InstanceIndex<'a>,
    /// Exposures kept for reuse, by region shape.
    cache: ExposureCache,
    /// Light-cone terms already computed, by support, bits of `s_O` and realizations: several
    /// observables on the same sites with the same spectrum (`Z_5` and `X_5`, say) have the
    /// same terms, which are then taken, not computed again (the same bits either way).
    local_terms: HashMap<(Vec<usize>, u64, usize), Vec<LocalTerms>>,
    /// The device errors' per-run sums, when the record has device sections.
    device: Option<DeviceData>,
    /// One pseudo-instance per site, for the device errors' light cones (empty when unused).
    sites: Vec<Instance>,
}

impl<'a> RunEvaluator<'a> {
    /// Splits the confidence over `n_observables` observables at `times`, and builds the walk
    /// graph of the run's lattice (once per run) for the light-cone statement.
    pub fn new(
        times: &'a [f64],
        noise: &'a NoiseModel,
        geometry: RunGeometry<'a>,
        n_observables: usize,
        confidence_level: f64,
        simultaneity: Simultaneity,
    ) -> Result<RunEvaluator<'a>, ConfidenceError> {
        let split = confidence::split(
            confidence_level,
            confidence::has_fluctuation_term(noise.redrawn),
            true,
            times.len() * n_observables,
            simultaneity,
        )?;
        let sources = noise
            .instances
            .iter()
            .map(SourceData::from_instance)
            .collect();
        let lattice = geometry.lattice;
        let bond_norms = geometry
            .hamiltonian
            .bond_norms_angular(lattice.n_bonds(), geometry.time_unit);
        let graph = WalkGraph::new(
            lattice,
            &bond_norms,
            geometry.hamiltonian.interaction_range,
            &noise.instances,
        );
        let index = match &graph {
            Ok(_) => InstanceIndex::new(&noise.instances, lattice.n_sites()),
            Err(_) => InstanceIndex::new(&[], 0),
        };
        let device = (!noise.device.is_empty()).then(|| {
            let n_y: Vec<u32> = match &graph {
                Ok(g) => (0..lattice.n_sites())
                    .map(|i| g.bonds_meeting(&[i]) as u32)
                    .collect(),
                Err(_) => vec![0; lattice.n_sites()],
            };
            DeviceData::new(&noise.device, &n_y)
        });
        let sites = match (&device, &graph) {
            (Some(d), Ok(_)) if d.wants_cone() => site_instances(lattice.n_sites()),
            _ => Vec::new(),
        };
        Ok(RunEvaluator {
            device,
            sites,
            fidelity_epsilon: split.epsilon,
            times,
            noise,
            simultaneity,
            split,
            sources,
            noise_terms: Vec::new(),
            local_terms: HashMap::new(),
            graph,
            index,
            cache: ExposureCache::new(EXPOSURE_BUDGET),
        })
    }

    /// The light-cone terms of an observable at every time (`None` when unavailable) and the
    /// status to record.
    #[allow(clippy::type_complexity)]
    fn local_terms(
        &mut self,
        support: &[usize],
        spread: f64,
        terms: Option<&Terms>,
        realizations: usize,
    ) -> (Option<Vec<LocalTerms>>, Option<TermByTerm>, LightCone) {
        let unavailable = |why: &Unavailable| (None, None, LightCone::Unavailable(why.to_string()));
        if support.is_empty() {
            return unavailable(&Unavailable::GlobalObservable);
        }
        let graph = match &self.graph {
            Ok(g) => g,
            Err(why) => return unavailable(why),
        };
        let exposure = match self.cache.exposure(graph, &self.index, self.times, support) {
            Ok(e) => e,
            Err(why) => return unavailable(&why),
        };
        let inputs = LocalInputs {
            graph,
            support,
            s_o: spread,
            instances: &self.noise.instances,
            sources: &self.sources,
            times: self.times,
            redrawn: self.noise.redrawn,
            realizations,
            p: self.split.p_point,
            p_single: self.split.p_single_point,
        };
        let key = (support.to_vec(), spread.to_bits(), realizations);
        let local = match self.local_terms.get(&key) {
            Some(l) => l.clone(),
            None => {
                let l = local_bounds_with(&inputs, &exposure);
                self.local_terms.insert(key, l.clone());
                l
            }
        };
        let by_term =
            terms.map(|t| term_bounds_cached(&inputs, t, &exposure, &self.index, &mut self.cache));
        let status = LightCone::Computed {
            order: exposure.order(),
            region_sources: exposure.region().len(),
            terms: by_term.as_ref().map(|r| match r {
                Ok(b) => Ok(b.n_terms),
                Err(why) => Err(why.to_string()),
            }),
        };
        (Some(local), by_term.and_then(Result::ok), status)
    }

    /// The noise terms at every time for spread `s_o` and `r` realizations.
    fn noise_terms(&mut self, s_o: f64, r: usize) -> &[PointBounds] {
        let key = s_o.to_bits();
        let i = match self.noise_terms.iter().position(|(k, _)| *k == key) {
            Some(i) => i,
            None => {
                let points = self
                    .times
                    .iter()
                    .map(|&t| {
                        evaluate_point(&PointInputs {
                            s_o,
                            t,
                            sources: &self.sources,
                            sensitivities: None,
                            redrawn: self.noise.redrawn,
                            realizations: r,
                            // No shot data: the shot term is filled in per observable.
                            shots: ShotData::Counts(&[]),
                            p: self.split.p_point,
                            alpha: self.split.alpha_point,
                            p_single: self.split.p_single_point,
                        })
                    })
                    .collect();
                self.noise_terms.push((key, points));
                self.noise_terms.len() - 1
            }
        };
        &self.noise_terms[i].1
    }

    /// Allows (the default) or forbids the comparison with an interior region for the terms of
    /// sums evaluated later (docs/method.md §5); forbidden, every term gets its exact region
    /// (slower on large lattices, never looser).
    pub fn set_comparison(&mut self, on: bool) {
        self.cache.set_comparison(on);
    }

    /// The bounds of one observable of spread `spread` on `support` (sorted; empty: global)
    /// from its sums; `terms` is its term structure, if it is a sum of local terms (then the
    /// term-by-term statement is a third candidate).
    pub fn observable(
        &mut self,
        name: &str,
        spread: f64,
        support: &[usize],
        terms: Option<&Terms>,
        sums: &ObservableSums,
    ) -> ObservableBounds {
        let r = sums.realizations;
        let alpha = self.split.alpha_point;
        // Ordered summation of R values of one sign-bounded quantity: plain summation in
        // realization order is deterministic, and its rounding (≤ R ulp of the sum) is far
        // below the shot term.
        let mean = sums
            .value_sums
            .iter()
            .map(|s| s / r.max(1) as f64)
            .collect();
        let uniform = match sums.shots {
            ShotSums::Uniform(s) => shot_hoeffding(spread, &vec![s; r], alpha),
            _ => f64::NAN,
        };
        let (local, term_by_term, light_cone) = self.local_terms(support, spread, terms, r);
        let device = self.device_terms(name, spread, support, terms);
        let with_device = |e: f64, k: usize| match &device {
            // Deterministic terms: added to E_1 and E_avg, the sum capped at the range
            // (docs/method.md §7).
            Some(d) => add_device(e, d.total[k], spread),
            None => e,
        };
        let noise = self.noise_terms(spread, r);
        let e_avg_global = noise
            .iter()
            .enumerate()
            .map(|(k, p)| with_device(p.e_avg, k))
            .collect();
        let mut statements = Vec::with_capacity(noise.len());
        let points = noise
            .iter()
            .enumerate()
            .map(|(k, p)| {
                let (e_shot, approximate) = match &sums.shots {
                    ShotSums::Uniform(_) => (uniform, false),
                    ShotSums::InverseCounts(inv) => {
                        (shot_hoeffding_from_sum(spread, r, inv[k], alpha), false)
                    }
                    ShotSums::SquaredErrors(sq) => (shot_normal_from_sum(r, sq[k], alpha), true),
                };
                let global = PointBounds {
                    e_shot,
                    shot_approximate: approximate,
                    half_width: p.e_avg + e_shot,
                    ..*p
                };
                let (mut point, statement) = combine_all(
                    &global,
                    local.as_ref().and_then(|l| l.get(k)),
                    term_by_term.as_ref().and_then(|t| t.points.get(k)),
                );
                statements.push(statement);
                if device.is_some() {
                    point.e_one = with_device(point.e_one, k);
                    point.e_avg = with_device(point.e_avg, k);
                    point.half_width = point.e_avg + point.e_shot;
                }
                point
            })
            .collect();
        ObservableBounds {
            name: name.to_string(),
            spread,
            mean,
            points,
            shot_approximate: matches!(sums.shots, ShotSums::SquaredErrors(_)),
            statements,
            light_cone,
            e_avg_global,
            local,
            term_by_term,
            data: None,
            device,
        }
    }

    /// The device-error terms of an observable (docs/method.md §7), with the light cone of its
    /// support when the lattice allows it; `None` when the record has no device sections.
    fn device_terms(
        &self,
        name: &str,
        spread: f64,
        support: &[usize],
        terms: Option<&Terms>,
    ) -> Option<DeviceTerms> {
        let data = self.device.as_ref()?;
        let cone = match &self.graph {
            Ok(g) if data.wants_cone() && !support.is_empty() => {
                SiteCone::new(g, support, &self.sites, self.times).ok()
            }
            _ => None,
        };
        let mut d = data.observable(name, spread, support, terms, self.times, cone.as_ref());
        // Term by term (docs/method.md §7.2): one light cone per term, for sums of few terms.
        if let (Some(t), Ok(g), true) = (terms, &self.graph, cone.is_some()) {
            if t.supports.len() <= MAX_TERMS_BY_TERM {
                let mut per_term = Vec::with_capacity(t.supports.len());
                let mut factors = Vec::with_capacity(t.supports.len());
                for ((sup, w), [lo, hi]) in t.supports.iter().zip(&t.weights).zip(&t.spectra) {
                    let Ok(c) = SiteCone::new(g, sup, &self.sites, self.times) else {
                        return Some(d);
                    };
                    per_term.push(data.observable(name, 1.0, sup, None, self.times, Some(&c)));
                    factors.push(w.abs() * (hi - lo));
                }
                d.tighten_by_terms(&per_term, &factors);
            }
        }
        Some(d)
    }

    /// The fidelity statement is a claim of its own: when the model statement was given only
    /// a share of ε (the data statement took the rest), it keeps the user's whole ε.
    pub fn set_fidelity_epsilon(&mut self, epsilon: f64) {
        self.fidelity_epsilon = epsilon;
    }

    /// The confidence split of the model statement.
    pub fn split(&self) -> &ConfidenceSplit {
        &self.split
    }

    /// All bounds of the run, with the observables' bounds in the run's order.
    pub fn finish(self, observables: Vec<ObservableBounds>) -> RunBounds {
        let split = self.split;
        let fidelity_p = match self.simultaneity {
            Simultaneity::Simultaneous => self.fidelity_epsilon / self.times.len().max(1) as f64,
            Simultaneity::Pointwise => self.fidelity_epsilon,
        };
        let fidelity = self
            .times
            .iter()
            .map(|&t| fidelity_bound(&self.sources, t, fidelity_p))
            .collect();
        RunBounds {
            split,
            sources: self.sources,
            observables,
            fidelity_p,
            fidelity,
        }
    }
}

/// Evaluates every bound of `run` under `noise` at confidence `confidence_level`.
pub fn evaluate_run(
    run: &Run,
    noise: &NoiseModel,
    confidence_level: f64,
    simultaneity: Simultaneity,
) -> Result<RunBounds, ConfidenceError> {
    let geometry = RunGeometry {
        lattice: &run.lattice,
        hamiltonian: &run.hamiltonian,
        time_unit: run.time_unit,
    };
    let mut ev = RunEvaluator::new(
        &run.times,
        noise,
        geometry,
        run.observables.len(),
        confidence_level,
        simultaneity,
    )?;
    let observables = run
        .observables
        .iter()
        .map(|o| {
            let sums = ObservableSums::of(o);
            ev.observable(&o.name, o.spread(), &o.support, o.terms.as_ref(), &sums)
        })
        .collect();
    Ok(ev.finish(observables))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Observable;
    use std::path::Path;

    /// Observables on the same sites with the same spread share their light-cone terms (the
    /// second is taken from the first), and the shared terms are those computed afresh: the
    /// bounds of each observable do not depend on which of them came first. One with another
    /// spread on the same sites gets terms of its own. (h5py fixture run and a valid record.)
    #[test]
    fn observables_on_the_same_sites_share_light_cone_terms_exactly() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference");
        let run = crate::inputs::run_file::read_run(&root.join("h5py/run_f32_gzip.h5")).unwrap();
        let record = crate::inputs::noise_record::read_noise_record(
            &root.join("noise/valid/chain-detuning.json"),
        )
        .unwrap();
        let model = record.expand(&run.lattice, run.time_unit).unwrap();
        let first = run
            .observables
            .iter()
            .find(|o| !o.support.is_empty() && o.terms.is_none())
            .unwrap()
            .clone();
        let mut same = first.clone();
        same.name = "same_sites".into();
        let mut wider = first.clone();
        wider.name = "wider_spectrum".into();
        wider.spectrum_max += first.spread();
        let by_name = |order: Vec<Observable>| {
            let mut r = run.clone();
            r.observables = order;
            let b = evaluate_run(&r, &model, 0.95, Simultaneity::Simultaneous).unwrap();
            let mut obs = b.observables;
            obs.sort_by(|a, b| a.name.cmp(&b.name));
            obs
        };
        let a = by_name(vec![first.clone(), same.clone(), wider.clone()]);
        let b = by_name(vec![wider.clone(), same.clone(), first.clone()]);
        assert_eq!(a, b);
        let find = |name: &str| a.iter().find(|o| o.name == name).unwrap();
        let (f, s, w) = (
            find(&first.name),
            find("same_sites"),
            find("wider_spectrum"),
        );
        assert!(f.local.is_some());
        assert_eq!(f.local, s.local);
        assert_eq!(f.points, s.points);
        assert_ne!(f.local, w.local);
    }
}
