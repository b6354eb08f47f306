//! The certificate's body: everything that follows from the inputs and the options, and
//! nothing else (docs/certificate.md). Its RFC 8785 form is what the digest covers.
//!
//! Numbers that are infinite (a worst case with an unbounded family, say) have no JSON form;
//! they are written as the string `"unbounded"`. Per-time quantities are stored as columns
//! (one array per quantity, aligned with `times`), which keeps the body compact and readable.

use serde_json::{json, Map, Value};

use super::claim;
use super::device;
use super::record::{DatasetDigest, FileRecord};
use crate::bounds::confidence::Simultaneity;
use crate::bounds::data_statement::DataStatement;
use crate::bounds::family;
use crate::bounds::run_bounds::{ObservableBounds, RunBounds};
use crate::inputs::run_file::RunOutline;
use crate::model::noise::{ActsOn, Amplitude, Family};
use crate::model::{NoiseModel, NoiseRecord};

/// The format name of certificates.
pub const FORMAT: &str = "quassay-certificate";
/// The format version of certificates.
pub const FORMAT_VERSION: u64 = 1;
/// The `format_minor` of a body whose noise record declares correlation times (format 1.4,
/// docs/certificate.md).
pub const FORMAT_MINOR_WINDOWS: u64 = 4;

/// A source's time model in the certificate (format 1.4): `static` (one draw per evolution),
/// or `windows` with τ as the record gives it and in the run's time unit.
fn time_model_json(
    s: &crate::model::noise::NoiseSource,
    run_unit: crate::model::units::TimeUnit,
) -> Value {
    match s.correlation_time {
        None => json!({ "kind": "static" }),
        Some((tau, unit)) => json!({
            "kind": "windows",
            "correlation_time": { "value": num(tau), "unit": unit.as_str() },
            "correlation_time_run_unit": num(tau * unit.factor_to(run_unit)),
        }),
    }
}

/// The options a certificate is computed with; recorded in the body, reused by `verify`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CertifyOptions {
    /// The confidence level `1 − ε`.
    pub confidence: f64,
    /// Simultaneous over all points (default) or pointwise.
    pub simultaneity: Simultaneity,
    /// Level of the consistency checks.
    pub check_level: f64,
    /// The share `S` of ε given to the data statement (docs/method.md §6); 0 for the model
    /// statement alone, which gives the body of certificate format 1.0 exactly.
    pub data_share: f64,
}

impl Default for CertifyOptions {
    fn default() -> Self {
        CertifyOptions {
            confidence: 0.95,
            simultaneity: Simultaneity::Simultaneous,
            check_level: 0.01,
            data_share: crate::bounds::data_statement::DEFAULT_DATA_SHARE,
        }
    }
}

pub use crate::numbers::num;

fn column(values: impl Iterator<Item = f64>) -> Value {
    Value::Array(values.map(num).collect())
}

/// Everything a certificate is computed from, read and checked (the run without its R × T
/// datasets, which the bounds and digests consumed as they streamed by).
#[derive(Debug, Clone)]
pub struct Loaded {
    pub run: RunOutline,
    pub record: NoiseRecord,
    pub model: NoiseModel,
}

/// The inputs as recorded.
#[derive(Debug, Clone, PartialEq)]
pub struct RecordedInputs {
    pub run: FileRecord,
    pub datasets: Vec<DatasetDigest>,
    pub noise_record: FileRecord,
}

/// Builds the body.
pub fn build_body(
    loaded: &Loaded,
    bounds: &RunBounds,
    inputs: &RecordedInputs,
    options: &CertifyOptions,
    checks: Value,
    verdict: Value,
) -> Value {
    let Loaded { run, record, model } = loaded;
    let mut run_file = inputs.run.to_json();
    run_file["datasets"] = Value::Array(inputs.datasets.iter().map(|d| d.to_json()).collect());
    let inconsistent = verdict["status"] == "inconsistent";
    let claims: Vec<Value> = run
        .observables
        .iter()
        .zip(&bounds.observables)
        .map(|(o, b)| {
            let mut text = claim::claim_sentence(
                &o.name,
                options.confidence,
                options.simultaneity,
                inconsistent,
            );
            let disjoint = disjoint_times(b);
            if !disjoint.is_empty() {
                text.push_str(&claim::disjoint_sentence(&disjoint));
            }
            json!({ "observable": o.name, "text": text })
        })
        .collect();
    let split = &bounds.split;
    let data = bounds.observables.iter().find_map(|b| b.data.as_ref());
    let mut body = json!({
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "tool": { "name": "quassay", "version": env!("CARGO_PKG_VERSION") },
        "options": {
            "confidence": num(options.confidence),
            "statement": options.simultaneity.as_str(),
            "check_level": num(options.check_level),
        },
        "claim": {
            "confidence": num(options.confidence),
            "statement": options.simultaneity.as_str(),
            "interval": "[mean - e_avg - e_shot, mean + e_avg + e_shot] at each recorded time",
            "per_observable": claims,
            "probability_split": {
                "epsilon": num(split.epsilon),
                "rule": split.rule,
                "noise_fluctuation_total": num(split.p),
                "shot_noise_total": num(split.alpha),
                "points": split.points,
                "noise_fluctuation_per_point": num(split.p_point),
                "shot_noise_per_point": num(split.alpha_point),
                "single_evolution_per_point": num(split.p_single_point),
                "correction": match options.simultaneity {
                    Simultaneity::Simultaneous => "bonferroni over recorded times x observables",
                    Simultaneity::Pointwise => "none (pointwise)",
                },
            },
        },
        "assumptions": claim::assumptions(),
        "not_covered": claim::not_covered(),
        "inputs": { "run": run_file, "noise_record": inputs.noise_record.to_json() },
        "run": run_json(run),
        "noise": noise_json(run, record, model),
        "fidelity": fidelity_json(run, bounds),
    });
    if let Some(d) = data {
        // Format 1.1 (docs/certificate.md): the data statement beside the model statement.
        body["format_minor"] = json!(1);
        body["options"]["data_share"] = num(options.data_share);
        let claim = &mut body["claim"];
        claim["interval"] = json!(
            "the intersection of the model statement [mean - e_avg - e_shot, mean + e_avg + \
             e_shot] and the data statement [data_statement.lower, data_statement.upper] at \
             each recorded time (certified_lower, certified_upper)"
        );
        let ps = &mut claim["probability_split"];
        ps["epsilon"] = num(1.0 - options.confidence);
        ps["model_statement_total"] = num(split.epsilon);
        ps["data_statement_total"] = num(crate::bounds::data_statement::shares(
            options.confidence,
            options.data_share,
        )
        .map_or(f64::NAN, |s| s.data_epsilon));
        ps["data_statement_per_point"] = num(d.alpha_point);
        ps["data_share"] = num(options.data_share);
        if let Value::Array(a) = &mut body["assumptions"] {
            a.push(json!(claim::DATA_ASSUMPTION));
        }
        // Format 1.2: observables declared to have two outcomes (their shots counted by the
        // exact binomial interval where they pool, docs/method.md §6.1).
        if run.observables.iter().any(|o| o.two_outcomes) {
            body["format_minor"] = json!(2);
            if let Value::Array(a) = &mut body["assumptions"] {
                a.push(json!(claim::TWO_OUTCOME_ASSUMPTION));
            }
        }
    }
    // Format 1.3: the device errors of a version 2 record (docs/method.md §7).
    if !model.device.is_empty() {
        body["format_minor"] = json!(device::FORMAT_MINOR);
        if let Value::Array(a) = &mut body["assumptions"] {
            a.extend(
                device::assumptions(&model.device)
                    .into_iter()
                    .map(|s| json!(s)),
            );
        }
        body["not_covered"] = json!(device::not_covered(&model.device));
        body["noise"]["format_version"] = json!(record.format_version);
        body["noise"]["device"] = device::record_json(
            &record.device,
            &model.device,
            &format!("rad/{}", run.time_unit.as_str()),
        );
        body["claim"]["device_errors"] = json!(
            "e_one and e_avg include e_device = e_incoherent + e_preparation + e_readout of each \
             observable (deterministic, no share of epsilon; docs/method.md §7)"
        );
    }
    // Format 1.4: sources drawn again during an evolution (record version 3, docs/method.md
    // §1): every source states its time model; the assumptions and gaps say what it covers.
    let windowed = record.sources.iter().any(|s| s.correlation_time.is_some());
    if windowed {
        body["format_minor"] = json!(FORMAT_MINOR_WINDOWS);
        body["noise"]["format_version"] = json!(record.format_version);
        if let Value::Array(a) = &mut body["noise"]["sources"] {
            for (v, s) in a.iter_mut().zip(&record.sources) {
                v["time_model"] = time_model_json(s, run.time_unit);
            }
        }
        if let Value::Array(a) = &mut body["assumptions"] {
            if let Some(first) = a.first_mut() {
                *first = json!(claim::WINDOWED_HAMILTONIAN);
            }
            a.push(json!(claim::WINDOWS_ASSUMPTION));
        }
        if let Value::Array(a) = &mut body["not_covered"] {
            for x in a.iter_mut() {
                if x.as_str() == Some(claim::TIME_DEPENDENCE_GAP) {
                    *x = json!(claim::WINDOWED_TIME_DEPENDENCE_GAP);
                }
            }
        }
        body["claim"]["time_model"] = json!(
            "sources with a correlation_time are constant on the windows [k tau, (k+1) tau) \
             from the start of each evolution and drawn independently in each; every \
             (instance, window) pair is a source of its own (docs/method.md §1, §3)"
        );
    }
    // The three large members are moved in: `json!` would serialise (copy) them, doubling the
    // body's peak memory for runs with many points.
    if let Value::Object(m) = &mut body {
        m.insert(
            "observables".into(),
            observables_json(run, bounds, windowed),
        );
        m.insert("checks".into(), checks);
        m.insert("verdict".into(), verdict);
    }
    body
}

fn run_json(run: &RunOutline) -> Value {
    let h = &run.hamiltonian;
    let factor = h.energy_unit.factor_to_angular(run.time_unit);
    let mut lattice = json!({
        "geometry": run.lattice.geometry().as_str(),
        "boundary": run.lattice.boundary().as_str(),
        "n_bonds": run.lattice.n_bonds(),
    });
    if !run.lattice.shape().is_empty() {
        lattice["shape"] = json!(run.lattice.shape());
    }
    let mut hamiltonian = json!({
        "energy_unit": h.energy_unit.as_str(),
        "bond_norm_max": num(h.bond_norm_max),
        "bond_norm_max_angular": num(h.bond_norm_max * factor),
        "interaction_range": h.interaction_range,
        "per_bond_norms_given": h.bond_norms.is_some(),
    });
    hamiltonian["angular_unit"] = json!(format!("rad/{}", run.time_unit.as_str()));
    let mut v = json!({
        "run_id": run.run_id,
        "time_unit": run.time_unit.as_str(),
        "n_sites": run.n_sites(),
        "n_times": run.n_times(),
        "n_realizations": run.n_realizations(),
        "n_observables": run.observables.len(),
        "lattice": lattice,
        "hamiltonian": hamiltonian,
        "times": column(run.times.iter().copied()),
    });
    if let Some(d) = &run.description {
        v["description"] = json!(d);
    }
    v
}

fn family_json(f: &Family) -> Value {
    match *f {
        Family::Uniform => json!({ "family": "uniform" }),
        Family::Normal { sigma } => json!({ "family": "normal", "sigma": num(sigma) }),
        Family::TruncatedNormal { sigma, cutoff } => {
            json!({ "family": "truncated_normal", "sigma": num(sigma), "cutoff": num(cutoff) })
        }
        Family::TwoPoint => json!({ "family": "two_point" }),
        Family::Bounded {
            lower,
            upper,
            std,
            symmetric,
        } => json!({
            "family": "bounded", "lower": num(lower), "upper": num(upper),
            "std": num(std), "symmetric": symmetric,
        }),
    }
}

fn noise_json(run: &RunOutline, record: &NoiseRecord, model: &NoiseModel) -> Value {
    let factor = record.frequency_unit.factor_to_angular(run.time_unit);
    let sources: Vec<Value> = record
        .sources
        .iter()
        .enumerate()
        .map(|(index, s)| {
            let c = family::constants(&s.family);
            let deltas: Vec<f64> = model
                .instances
                .iter()
                .filter(|i| i.source == index)
                .map(|i| i.delta)
                .collect();
            let acts_on = match &s.acts_on {
                ActsOn::EachSite => json!("each_site"),
                ActsOn::EachBond => json!("each_bond"),
                ActsOn::Sites(list) => json!({ "sites": list }),
            };
            let mut v = json!({
                "name": s.name,
                "acts_on": acts_on,
                "instances": deltas.len(),
                "operator_spectrum": [num(s.operator_spectrum[0]), num(s.operator_spectrum[1])],
                "distribution": family_json(&s.family),
                "constants": {
                    "b": num(c.b),
                    "sigma": num(c.sigma),
                    "width": num(c.width),
                    "kappa": c.kappa.map_or(Value::Null, num),
                    "symmetric": c.symmetric,
                },
                "mean_offset": num(s.mean_offset),
                "mean_offset_uncertainty": num(s.mean_offset_uncertainty),
            });
            match &s.amplitude {
                Amplitude::Scalar(a) => {
                    v["amplitude"] = num(*a);
                    v["delta"] = num(deltas.first().copied().unwrap_or(0.0));
                }
                Amplitude::PerInstance(a) => {
                    v["amplitude"] = column(a.iter().copied());
                    v["delta"] = column(deltas.iter().copied());
                }
            }
            v
        })
        .collect();
    let mut v = json!({
        "frequency_unit": record.frequency_unit.as_str(),
        "to_angular_factor": num(factor),
        "angular_unit": format!("rad/{}", run.time_unit.as_str()),
        "redrawn": record.redrawn.as_str(),
        "n_instances": model.instances.len(),
        "sources": sources,
    });
    if let Some(c) = &record.calibration {
        let mut m = Map::new();
        for (k, x) in [
            ("method", &c.method),
            ("date", &c.date),
            ("notes", &c.notes),
        ] {
            if let Some(x) = x {
                m.insert(k.into(), json!(x));
            }
        }
        v["calibration"] = Value::Object(m);
    }
    v
}

/// `windowed`: the record declares correlation times (format 1.4), so each observable also
/// gets the fluctuation term static noise would have (`fluctuation_static`).
fn observables_json(run: &RunOutline, bounds: &RunBounds, windowed: bool) -> Value {
    let list: Vec<Value> = run
        .observables
        .iter()
        .zip(&bounds.observables)
        .map(|(o, b)| {
            let p = &b.points;
            let n = p.len();
            let route = |r: Option<crate::bounds::global::FluctuationRoute>| match r {
                Some(r) => json!(r.as_str()),
                None => Value::Null,
            };
            let mut v = json!({
                "name": o.name,
                "support": if o.support.is_empty() { json!("global") } else { json!(o.support) },
                "spectrum": [num(o.spectrum_min), num(o.spectrum_max)],
                "spread": num(b.spread),
                "shot_term": if b.shot_approximate {
                    "normal approximation from standard errors (approximate)"
                } else {
                    "hoeffding from shot counts"
                },
                "statement_used": b.statements.iter().map(|s| s.as_str()).collect::<Vec<_>>(),
                "light_cone": b.light_cone.describe(),
                "e_avg_global": column(b.e_avg_global.iter().copied()),
                "mean": column(b.mean.iter().copied()),
                "e_wc": column(p.iter().map(|x| x.e_wc)),
                "e_sys": column(p.iter().map(|x| x.e_sys)),
                "e_bias": column(p.iter().map(|x| x.e_bias)),
                "fluctuation": column(p.iter().map(|x| x.fluctuation)),
                "fluctuation_route": p.iter().map(|x| route(x.route)).collect::<Vec<_>>(),
                "e_avg": column(p.iter().map(|x| x.e_avg)),
                "fluctuation_single": column(p.iter().map(|x| x.fluctuation_one)),
                "fluctuation_single_route": p.iter().map(|x| route(x.route_one)).collect::<Vec<_>>(),
                "e_one": column(p.iter().map(|x| x.e_one)),
                "e_shot": column(p.iter().map(|x| x.e_shot)),
                "lower": column((0..n).map(|k| b.interval(k)[0])),
                "upper": column((0..n).map(|k| b.interval(k)[1])),
            });
            if let Some(l) = &b.local {
                v["e_avg_light_cone"] = column(l.iter().map(|x| x.e_avg));
            }
            if windowed {
                v["fluctuation_static"] = column(p.iter().map(|x| x.fluctuation_static));
            }
            if let Some(t) = &b.term_by_term {
                let forms = |i: usize| column(t.forms.iter().map(move |f| f[i] as f64));
                v["term_by_term"] = json!({
                    "terms": t.n_terms,
                    "e_avg": column(t.points.iter().map(|x| x.e_avg)),
                    "form_used": b.statements.iter().map(|s| s.form()).collect::<Vec<_>>(),
                    "sources_by_form": {
                        "global": forms(0),
                        "whole_support": forms(1),
                        "term_by_term": forms(2),
                    },
                });
                // Only when the comparison with an interior region was used (docs/method.md
                // §5.1), so that certificates without it keep their bytes.
                if t.compared > 0 {
                    v["term_by_term"]["compared_terms"] = json!(t.compared);
                }
            }
            if let Some(d) = &b.data {
                if o.two_outcomes {
                    v["two_outcomes"] = json!(true);
                }
                v["data_statement"] = data_json(d);
                let certified = |i: usize| -> Vec<Value> {
                    (0..n)
                        .map(|k| b.certified(k).map_or(Value::Null, |c| num(c[i])))
                        .collect()
                };
                v["certified_lower"] = Value::Array(certified(0));
                v["certified_upper"] = Value::Array(certified(1));
            }
            if let Some(d) = &b.device {
                device::observable_json(&mut v, d);
            }
            if let Some(d) = &o.description {
                v["description"] = json!(d);
            }
            v
        })
        .collect();
    Value::Array(list)
}

/// The time indices at which the model and data statements are disjoint.
fn disjoint_times(b: &ObservableBounds) -> Vec<usize> {
    match &b.data {
        Some(d) => d
            .points
            .iter()
            .enumerate()
            .filter(|(_, p)| p.certified.is_none())
            .map(|(k, _)| k)
            .collect(),
        None => Vec::new(),
    }
}

/// An observable's data statement (docs/certificate.md, format 1.1).
fn data_json(d: &DataStatement) -> Value {
    let p = &d.points;
    let mut v = json!({
        "method": p.iter().map(|_| d.method.as_str()).collect::<Vec<_>>(),
        "failure_probability_per_point": num(d.alpha_point),
        "mean_lower": column(p.iter().map(|x| x.mean_interval[0])),
        "mean_upper": column(p.iter().map(|x| x.mean_interval[1])),
        "added": column(p.iter().map(|x| x.added)),
        "lower": column(p.iter().map(|x| x.interval[0])),
        "upper": column(p.iter().map(|x| x.interval[1])),
        "narrower": p
            .iter()
            .map(|x| if x.data_narrower { "data" } else { "model" })
            .collect::<Vec<_>>(),
    });
    // Format 1.2: the pooled counts behind the exact binomial interval.
    if let Some(c) = &d.counts {
        v["outcome_counts"] = json!(c.iter().map(|x| x[0]).collect::<Vec<_>>());
        v["shots_counted"] = json!(c.iter().map(|x| x[1]).collect::<Vec<_>>());
    }
    v
}

fn fidelity_json(run: &RunOutline, bounds: &RunBounds) -> Value {
    let f = &bounds.fidelity;
    json!({
        "statement": "for one noisy evolution from a pure initial state, F(t) = |<psi(t)|psi_g(t)>|^2 >= f_low at every recorded time, with the stated probability",
        "failure_probability_per_time": num(bounds.fidelity_p),
        "times": column(run.times.iter().copied()),
        "d_p": column(f.iter().map(|x| x.d_p)),
        "d_wc": column(f.iter().map(|x| x.d_wc)),
        "f_low": column(f.iter().map(|x| x.f_low)),
        "vacuous": f.iter().map(|x| x.vacuous).collect::<Vec<_>>(),
    })
}
