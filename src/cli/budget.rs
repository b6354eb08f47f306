//! `quassay budget`: the inverse questions of planning (docs/budget.md).
//!
//! From a noise record, a lattice and an observable's spectrum it answers: (a) the largest
//! scale factor on every amplitude that keeps the error under a target at a given time,
//! (b) the longest time at the recorded amplitudes, (c) the largest system (chain length, or
//! L for an L×L or L×L×L lattice) at the recorded amplitudes and time, and (d) a table of (a)
//! over system sizes. Each answer stands beside its worst-case counterpart (no cancellation
//! between sources) and their ratio, the gain. Both errors are answered: the averaged trace
//! (`E_avg + E_shot`, the half-width `certify` states) and one noisy evolution (`E_1`).
//! The bounds are the global ones (docs/method.md §3); the search is in [`crate::bounds::planning`].
//! A record with device sections (version 2) has their global terms (docs/method.md §7) in every
//! answer, and with an `incoherent` section budget also answers (e) the largest incoherent rate.
//! With `--support` it answers (f) the same questions for a local observable with the bounds
//! `certify` computes (light cone and global, the smaller), through the same evaluator
//! (`budget_local.rs`).

use std::path::PathBuf;

use serde_json::{json, Value};

use super::{print_stdout, Outcome};
use crate::bounds::confidence::{has_fluctuation_term, split, Simultaneity};
use crate::bounds::device::GlobalDevice;
use crate::bounds::global::SourceData;
use crate::bounds::planning::{self, Answer, PointSetting, Which};
use crate::inputs::noise_record::read_noise_record;
use crate::model::device::SiteSet;
use crate::model::lattice::{Boundary, Geometry, Lattice};
use crate::model::noise::{ActsOn, Amplitude, NoiseRecord};
use crate::model::units::{FrequencyUnit, TimeUnit};
use crate::numbers::short;
use crate::{Error, InputKind};

#[path = "budget_local.rs"]
mod local;

/// Largest number of sites the system-size search goes to.
const MAX_SITES: usize = 1_000_000;

/// The command line of `quassay budget`.
#[derive(Debug, clap::Args)]
pub struct BudgetArgs {
    /// The noise record (JSON, format quassay-noise v1, v2 or v3).
    #[arg(long, value_name = "NOISE.json")]
    pub noise: PathBuf,
    /// The lattice: chain:N, square:LxW (or square:L) or cubic:LxWxH (or cubic:L).
    #[arg(long, value_parser = parse_lattice, value_name = "GEOMETRY:SHAPE")]
    pub lattice: (Geometry, Vec<usize>),
    /// Boundary condition of the lattice.
    #[arg(long, default_value = "open", value_parser = parse_boundary)]
    pub boundary: Boundary,
    /// The time unit of --time (and of the run being planned): s, ms, us or ns.
    #[arg(long, value_parser = parse_time_unit)]
    pub time_unit: TimeUnit,
    /// Eigenvalue range of the observable, MIN,MAX (e.g. -1,1).
    #[arg(long, value_parser = parse_spectrum, allow_hyphen_values = true, value_name = "MIN,MAX")]
    pub spectrum: [f64; 2],
    /// The error not to exceed (same units as the observable).
    #[arg(long, value_parser = positive)]
    pub target: f64,
    /// The evolution time, in --time-unit.
    #[arg(long, value_parser = positive)]
    pub time: f64,
    /// Confidence level 1 - epsilon, strictly between 0 and 1.
    #[arg(long, default_value_t = 0.95, value_parser = open_unit)]
    pub confidence: f64,
    /// Number of (time, observable) points the claim is to hold for simultaneously
    /// (Bonferroni, as certify does over times x observables).
    #[arg(long, default_value_t = 1, value_parser = at_least_one)]
    pub points: usize,
    /// Realizations averaged in the reported trace.
    #[arg(long, default_value_t = 1, value_parser = at_least_one)]
    pub realizations: usize,
    /// Shots per realization; without it the averaged error has no shot term.
    #[arg(long, value_parser = at_least_one_u64)]
    pub shots: Option<u64>,
    /// Linear sizes of the table (chain length, or L of L×L / L×L×L), comma separated
    /// [default: chain 10,100,1000,10000; square 3,10,32,100; cubic 3,5,10,22].
    #[arg(long, value_delimiter = ',', value_parser = at_least_one)]
    pub sizes: Option<Vec<usize>>,
    /// Sites of a local observable on --lattice (0-based, comma separated): adds the
    /// light-cone answers, as certify computes them (needs --bond-norm and --energy-unit).
    #[arg(long, value_delimiter = ',', requires_all = ["bond_norm", "energy_unit"], value_name = "SITES")]
    pub support: Option<Vec<usize>>,
    /// The largest norm of one bond term of the target Hamiltonian (as the run file's
    /// bond_norm_max), in --energy-unit; for --support.
    #[arg(long, value_parser = nonnegative)]
    pub bond_norm: Option<f64>,
    /// The unit of --bond-norm: rad/s, rad/ms, rad/us, rad/ns, Hz, kHz, MHz or GHz.
    #[arg(long, value_parser = parse_energy_unit)]
    pub energy_unit: Option<FrequencyUnit>,
    /// Print the answers as JSON.
    #[arg(long)]
    pub json: bool,
}

fn parse_lattice(text: &str) -> Result<(Geometry, Vec<usize>), String> {
    let usage = "give chain:N, square:LxW (or square:L) or cubic:LxWxH (or cubic:L)";
    let (g, shape) = text
        .split_once(':')
        .ok_or_else(|| format!("'{text}' has no ':'; {usage}"))?;
    let geometry = match Geometry::parse(g) {
        Some(g @ (Geometry::Chain | Geometry::Square | Geometry::Cubic)) => g,
        _ => return Err(format!("'{g}' is not chain, square or cubic; {usage}")),
    };
    let mut dims = Vec::new();
    for part in shape.split('x') {
        match part.trim().parse::<usize>() {
            Ok(n) if n > 0 => dims.push(n),
            _ => return Err(format!("'{part}' is not a positive integer; {usage}")),
        }
    }
    let d = geometry.dimension();
    if dims.len() == 1 && d > 1 {
        dims = vec![dims[0]; d];
    }
    if dims.len() != d {
        return Err(format!(
            "a {g} lattice has {d} side(s), got {}; {usage}",
            dims.len()
        ));
    }
    Ok((geometry, dims))
}

fn parse_boundary(text: &str) -> Result<Boundary, String> {
    Boundary::parse(text).ok_or_else(|| format!("'{text}' is not open or periodic"))
}

fn parse_time_unit(text: &str) -> Result<TimeUnit, String> {
    TimeUnit::parse(text)
        .ok_or_else(|| format!("'{text}' is not a time unit; give s, ms, us or ns"))
}

fn number(text: &str) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        _ => Err(format!("'{text}' is not a finite number")),
    }
}

fn parse_spectrum(text: &str) -> Result<[f64; 2], String> {
    let (a, b) = text
        .split_once(',')
        .ok_or_else(|| format!("'{text}' is not MIN,MAX; give e.g. -1,1"))?;
    let (a, b) = (number(a)?, number(b)?);
    if a < b {
        Ok([a, b])
    } else {
        Err(format!("the minimum {a} must be below the maximum {b}"))
    }
}

fn nonnegative(text: &str) -> Result<f64, String> {
    let x = number(text)?;
    if x >= 0.0 {
        Ok(x)
    } else {
        Err(format!("{x} must be at least 0"))
    }
}

fn parse_energy_unit(text: &str) -> Result<FrequencyUnit, String> {
    FrequencyUnit::parse(text)
        .ok_or_else(|| format!("'{text}' is not one of {}", FrequencyUnit::accepted()))
}

fn positive(text: &str) -> Result<f64, String> {
    let x = number(text)?;
    if x > 0.0 {
        Ok(x)
    } else {
        Err(format!("{x} must be positive"))
    }
}

fn open_unit(text: &str) -> Result<f64, String> {
    let x = number(text)?;
    if x > 0.0 && x < 1.0 {
        Ok(x)
    } else {
        Err(format!("{x} is not strictly between 0 and 1"))
    }
}

fn at_least_one(text: &str) -> Result<usize, String> {
    match text.trim().parse::<usize>() {
        Ok(n) if n >= 1 => Ok(n),
        _ => Err(format!("'{text}' is not a positive integer")),
    }
}

fn at_least_one_u64(text: &str) -> Result<u64, String> {
    at_least_one(text).map(|n| n as u64)
}

/// The planning problem with everything read and checked.
struct Problem {
    record: NoiseRecord,
    noise_path: PathBuf,
    geometry: Geometry,
    boundary: Boundary,
    time_unit: TimeUnit,
}

impl Problem {
    /// The expanded sources and the device errors' global sums on a lattice of that shape.
    fn expanded(&self, shape: &[usize]) -> crate::Result<(Vec<SourceData>, GlobalDevice)> {
        let lattice = Lattice::regular(self.geometry, shape, self.boundary)
            .map_err(|e| Error::Options(format!("--lattice: {e}")))?;
        let model = self
            .record
            .expand(&lattice, self.time_unit)
            .map_err(|problems| Error::Input {
                kind: InputKind::NoiseRecord,
                file: self.noise_path.clone(),
                problems,
            })?;
        let sources = model
            .instances
            .iter()
            .map(SourceData::from_instance)
            .collect();
        Ok((sources, GlobalDevice::new(&model.device)))
    }

    /// Why the record cannot be laid on other system sizes, if it cannot.
    fn not_resizable(&self) -> Option<String> {
        fn listed<'a>(mut sets: impl Iterator<Item = &'a SiteSet>) -> bool {
            sets.any(|s| matches!(s, SiteSet::Sites(_)))
        }
        let d = &self.record.device;
        let device = [
            (
                "incoherent",
                listed(d.incoherent.iter().flatten().map(|c| &c.acts_on)),
            ),
            (
                "preparation",
                listed(d.preparation.iter().flatten().map(|p| &p.acts_on)),
            ),
            (
                "readout",
                listed(
                    d.readout
                        .iter()
                        .flat_map(|r| &r.entries)
                        .map(|e| &e.acts_on),
                ),
            ),
        ];
        if let Some((what, _)) = device.iter().find(|(_, l)| *l) {
            return Some(format!(
                "an entry of the record's {what} section lists its sites explicitly, which fixes \
                 the system"
            ));
        }
        self.record.sources.iter().enumerate().find_map(|(i, s)| {
            if matches!(s.acts_on, ActsOn::Sites(_)) {
                Some(format!(
                    "source {i} ('{}') lists its sites explicitly, which fixes the system",
                    s.name
                ))
            } else if matches!(s.amplitude, Amplitude::PerInstance(_)) {
                Some(format!(
                    "source {i} ('{}') gives one amplitude per instance, which fixes the system",
                    s.name
                ))
            } else {
                None
            }
        })
    }

    fn shape(&self, l: usize) -> Vec<usize> {
        vec![l; self.geometry.dimension()]
    }

    /// The smallest side the search over system sizes tries: 3 for a periodic lattice, and 2
    /// when a source acts on every bond (a side of 1 has no bond along it, and a 1 × 1 array
    /// none at all, on which such a record cannot be laid).
    fn min_side(&self) -> usize {
        let bonds = self
            .record
            .sources
            .iter()
            .any(|s| matches!(s.acts_on, ActsOn::EachBond));
        if self.boundary == Boundary::Periodic {
            3
        } else if bonds {
            2
        } else {
            1
        }
    }

    fn max_side(&self) -> usize {
        match self.geometry.dimension() {
            1 => MAX_SITES,
            2 => 1000,
            _ => 100,
        }
    }
}

/// One answer with its worst-case counterpart.
struct Pair {
    stochastic: Answer,
    worst: Answer,
}

impl Pair {
    fn gain(&self) -> Option<f64> {
        planning::gain(self.stochastic, self.worst)
    }
}

fn answer_json(a: Answer) -> Value {
    match a {
        Answer::Found { value, upper } => json!({
            "status": "found", "value": finite(value), "bracket_upper": finite(upper),
        }),
        Answer::Unlimited => json!({ "status": "unlimited" }),
        Answer::Infeasible => json!({ "status": "infeasible" }),
    }
}

fn finite(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        json!("unbounded")
    }
}

fn pair_json(p: &Pair) -> Value {
    json!({
        "stochastic": answer_json(p.stochastic),
        "worst_case": answer_json(p.worst),
        "gain": p.gain().map(finite),
    })
}

/// Runs `budget`.
pub fn run(args: &BudgetArgs) -> crate::Result<Outcome> {
    let record = read_noise_record(&args.noise)?;
    let s_o = args.spectrum[1] - args.spectrum[0];
    let fluct = has_fluctuation_term(record.redrawn);
    let cs = split(
        args.confidence,
        fluct,
        args.shots.is_some(),
        args.points,
        Simultaneity::Simultaneous,
    )
    .map_err(|e| Error::Options(format!("--confidence: {e:?}")))?;
    let redrawn = record.redrawn;
    let prob = Problem {
        noise_path: args.noise.clone(),
        geometry: args.lattice.0,
        boundary: args.boundary,
        time_unit: args.time_unit,
        record,
    };
    let shape = args.lattice.1.clone();
    let (sources, device) = prob.expanded(&shape)?;
    let set = PointSetting {
        device,
        s_o,
        redrawn,
        realizations: args.realizations,
        shots: args.shots,
        p: cs.p_point,
        alpha: cs.alpha_point,
        p_single: cs.p_single_point,
    };
    let (t, target) = (args.time, args.target);
    let whiches = [Which::Averaged, Which::Single];

    // (a) the largest scale factor, (b) the longest time.
    let scale: Vec<Pair> = whiches
        .iter()
        .map(|&w| Pair {
            stochastic: planning::largest_scale(&set, &sources, t, target, w),
            worst: planning::largest_scale_worst(&set, &sources, t, target, w),
        })
        .collect();
    let time: Vec<Pair> = whiches
        .iter()
        .map(|&w| Pair {
            stochastic: planning::longest_time(&set, &sources, target, w, t),
            worst: planning::longest_time_worst(&set, &sources, target, w, t),
        })
        .collect();

    // (g) the longest correlation time, common to every source (stochastic statement only:
    // the worst case does not depend on it).
    let correlation: Vec<Answer> = whiches
        .iter()
        .map(|&w| planning::longest_correlation_time(&set, &sources, t, target, w))
        .collect();

    // (e) the largest total incoherent rate, with an incoherent section.
    let rates: Option<Vec<Pair>> = prob.record.device.incoherent.as_ref().map(|_| {
        whiches
            .iter()
            .map(|&w| Pair {
                stochastic: planning::largest_rate_sum(&set, &sources, t, target, w, false),
                worst: planning::largest_rate_sum(&set, &sources, t, target, w, true),
            })
            .collect()
    });

    // (c) the largest system, (d) the table; both need the record on other sizes.
    let resize = prob.not_resizable();
    let mut size: Option<Vec<Pair>> = None;
    let mut table: Vec<Value> = Vec::new();
    let mut table_rows: Vec<(usize, usize, Vec<Pair>)> = Vec::new();
    if resize.is_none() {
        let (lo, hi) = (prob.min_side(), prob.max_side());
        let mut pairs = Vec::new();
        for &w in &whiches {
            let failure = std::cell::RefCell::new(None::<String>);
            let f = |worst: bool| {
                planning::largest_integer(
                    |l| match prob.expanded(&prob.shape(l)) {
                        Ok((src, device)) if worst => {
                            planning::worst_error(&PointSetting { device, ..set }, &src, t, w)
                        }
                        Ok((src, device)) => {
                            planning::error(&PointSetting { device, ..set }, &src, t, w)
                        }
                        Err(e) => {
                            failure.borrow_mut().get_or_insert(e.to_string());
                            f64::INFINITY
                        }
                    },
                    target,
                    lo,
                    hi,
                )
            };
            let stochastic = f(false);
            let worst = f(true);
            if let Some(e) = failure.into_inner() {
                return Err(Error::Options(e));
            }
            pairs.push(Pair { stochastic, worst });
        }
        size = Some(pairs);
        let sizes = args.sizes.clone().unwrap_or_else(|| match prob.geometry {
            Geometry::Chain => vec![10, 100, 1000, 10000],
            Geometry::Square => vec![3, 10, 32, 100],
            _ => vec![3, 5, 10, 22],
        });
        for l in sizes {
            if l < lo {
                return Err(Error::Options(format!(
                    "--sizes: {l} is below the smallest side {lo} of a {} lattice",
                    prob.boundary.as_str()
                )));
            }
            let (src, device) = prob.expanded(&prob.shape(l))?;
            let set = PointSetting { device, ..set };
            let pairs: Vec<Pair> = whiches
                .iter()
                .map(|&w| Pair {
                    stochastic: planning::largest_scale(&set, &src, t, target, w),
                    worst: planning::largest_scale_worst(&set, &src, t, target, w),
                })
                .collect();
            table_rows.push((l, src.len(), pairs));
        }
    }
    let mut slopes = Vec::new();
    for (k, w) in whiches.iter().enumerate() {
        let pts: Vec<(f64, f64)> = table_rows
            .iter()
            .filter_map(|(_, m, p)| {
                p[k].gain()
                    .filter(|g| g.is_finite())
                    .map(|g| (*m as f64, g))
            })
            .filter(|(m, _)| *m > 0.0)
            .collect();
        let slope = (pts.len() >= 2).then(|| planning::log_log_slope(&pts));
        slopes.push((w.as_str(), slope));
    }
    for (l, m, pairs) in &table_rows {
        table.push(json!({
            "side": l, "sources": m,
            "averaged": pair_json(&pairs[0]), "single": pair_json(&pairs[1]),
        }));
    }

    // (f) the light-cone answers for a local observable.
    let local = match &args.support {
        Some(sites) => Some(local_answers(args, &prob, &shape, sites, resize.is_none())?),
        None => None,
    };

    let shot = planning::shot_term(&set);
    let unit = args.time_unit.as_str();
    let text = if args.json {
        let by = |v: &[Pair]| json!({ "averaged": pair_json(&v[0]), "single": pair_json(&v[1]) });
        let mut j = json!({
            "noise_record": args.noise.display().to_string(),
            "lattice": { "geometry": prob.geometry.as_str(), "shape": shape,
                         "boundary": prob.boundary.as_str() },
            "sources": sources.len(),
            "redrawn": prob.record.redrawn.as_str(),
            "time_unit": unit,
            "spread": s_o,
            "target": target,
            "time": t,
            "confidence": args.confidence,
            "points": args.points,
            "realizations": args.realizations,
            "shots": args.shots,
            "e_shot": shot,
            "failure_probability": { "fluctuation": cs.p_point, "shots": cs.alpha_point,
                                     "single_evolution": cs.p_single_point },
            "errors": {
                "averaged": "e_avg + e_shot (global bounds, docs/method.md §3)",
                "single": "e_one, one noisy evolution (global bounds, docs/method.md §3)",
            },
            "statement": "model statement only, at the whole confidence level; a certificate \
                          also intersects it with the data statement (docs/method.md section \
                          6), which needs the data",
            "bisection_relative_tolerance": planning::REL_TOL,
            "scale": by(&scale),
            "time_limit": by(&time),
            "correlation_time": {
                "averaged": answer_json(correlation[0]),
                "single": answer_json(correlation[1]),
                "meaning": "the longest correlation time, the same for every source, that keeps \
                            the error within the target at the given time (noise drawn again \
                            every tau during an evolution, docs/method.md section 1); \
                            unlimited: static noise already does",
            },
            "size": match (&size, &resize) {
                (Some(v), _) => by(v),
                (None, why) => json!({ "status": "not_available", "reason": why }),
            },
            "table": table,
            "gain_exponent": slopes.iter().map(|(w, s)| (w.to_string(), json!(s))).collect::<serde_json::Map<_, _>>(),
        });
        if !prob.record.device.is_empty() {
            j["device_errors"] = device_json(&set, t, unit, rates.as_deref());
        }
        if let Some(l) = &local {
            j["local"] = local_json(l);
        }
        let mut s = serde_json::to_string_pretty(&j).unwrap_or_default();
        s.push('\n');
        s
    } else {
        let mut text = render_text(
            args,
            &prob,
            &sources,
            shot,
            &scale,
            &time,
            &correlation,
            &size,
            &resize,
            &table_rows,
            &slopes,
            &set,
            rates.as_deref(),
        );
        if let Some(l) = &local {
            local_text(&mut text, l, t, unit);
        }
        text
    };
    print_stdout(&text)?;
    Ok(Outcome::Success)
}

/// Said when the record has device sections: how they enter the answers.
const DEVICE_NOTE: &str = "the record's device errors (docs/method.md section 7) are in every \
     answer, in their global forms (every site; the readout term as for an observable read on \
     all sites), added with certainty to E_avg, E_1 and the worst case, each sum capped at the \
     spread";

/// The device terms at time `t` and (e), for `--json`.
fn device_json(set: &PointSetting, t: f64, unit: &str, rates: Option<&[Pair]>) -> Value {
    let d = &set.device;
    let [inc, prep, meas] = d.terms(set.s_o, t);
    let mut v = json!({
        "included": DEVICE_NOTE,
        "e_incoherent": finite(inc),
        "e_preparation": finite(prep),
        "e_readout": finite(meas),
        "e_device": finite(d.term(set.s_o, t)),
        "sites": d.sites,
        "rate_unit": format!("1/{unit}"),
        "recorded_rate_sum": finite(d.rate_sum),
    });
    if let Some(r) = rates {
        v["largest_rate_sum"] = json!({ "averaged": pair_json(&r[0]), "single": pair_json(&r[1]) });
    }
    v
}

/// The text of (e): the largest total incoherent rate, per site, and what it means for T1 and
/// T2 (docs/method.md §7.1: pure relaxation has `Γ = 1/T1`, pure dephasing `Γ = 1/(2 T2)`).
fn rate_rows(s: &mut String, set: &PointSetting, rates: &[Pair], unit: &str) {
    let d = &set.device;
    s.push_str(&format!(
        "(e) largest total incoherent rate sum_i Gamma_i (1/{unit}; recorded {})\n",
        show(d.rate_sum)
    ));
    row(s, "averaged (E_avg + E_shot)", &rates[0], false, "");
    row(s, "single evolution (E_1)", &rates[1], false, "");
    if let Answer::Found { value, .. } = rates[0].stochastic {
        let n = d.sites.max(1) as f64;
        let per_site = value / n;
        s.push_str(&format!(
            "  averaged, spread evenly over the {} sites: Gamma = {} per site (1/{unit}), that \
             is T1 >= {} {unit} for pure relaxation or T2 >= {} {unit} for pure dephasing",
            d.sites,
            short(per_site),
            short(1.0 / per_site),
            short(0.5 / per_site),
        ));
        if d.rate_sum > 0.0 {
            s.push_str(&format!(
                "; {}x the recorded rates",
                short(value / d.rate_sum)
            ));
        }
        s.push('\n');
    }
}

/// Numbers for people: the project's one rule ([`crate::numbers::short`]).
fn show(x: f64) -> String {
    short(x)
}

fn show_answer(a: Answer, integer: bool) -> String {
    match a {
        Answer::Found { value, .. } if integer => format!("{value:.0}"),
        Answer::Found { value, .. } => show(value),
        Answer::Unlimited => "unlimited".into(),
        Answer::Infeasible => "none".into(),
    }
}

fn row(out: &mut String, label: &str, p: &Pair, integer: bool, suffix: &str) {
    let g = p
        .gain()
        .map(|g| format!("{}x", show(g)))
        .unwrap_or_else(|| "-".into());
    out.push_str(&format!(
        "  {label:<28} {:>14} {:>14} {:>12}\n",
        format!("{}{suffix}", show_answer(p.stochastic, integer)),
        format!("{}{suffix}", show_answer(p.worst, integer)),
        g
    ));
}

#[allow(clippy::too_many_arguments)]
fn render_text(
    args: &BudgetArgs,
    prob: &Problem,
    sources: &[SourceData],
    shot: f64,
    scale: &[Pair],
    time: &[Pair],
    correlation: &[Answer],
    size: &Option<Vec<Pair>>,
    resize: &Option<String>,
    table: &[(usize, usize, Vec<Pair>)],
    slopes: &[(&str, Option<f64>)],
    set: &PointSetting,
    rates: Option<&[Pair]>,
) -> String {
    let unit = args.time_unit.as_str();
    let shape: Vec<String> = args.lattice.1.iter().map(|n| n.to_string()).collect();
    let mut s = format!(
        "budget: {} on a {} lattice {} ({} boundary), {} noise instances, redrawn {}\n",
        args.noise.display(),
        prob.geometry.as_str(),
        shape.join("x"),
        prob.boundary.as_str(),
        sources.len(),
        prob.record.redrawn.as_str(),
    );
    s.push_str(&format!(
        "target error {} (observable spread {}) at t = {} {unit}, confidence {} over {} point(s); \
         averaged trace: {} realization(s), {}\n\n",
        show(args.target),
        show(args.spectrum[1] - args.spectrum[0]),
        show(args.time),
        args.confidence,
        args.points,
        args.realizations,
        match args.shots {
            Some(n) => format!("{n} shots each (E_shot = {})", show(shot)),
            None => "no shot term".into(),
        }
    ));
    if !prob.record.device.is_empty() {
        let d = &set.device;
        let [inc, prep, meas] = d.terms(set.s_o, args.time);
        s.push_str(&format!(
            "device errors at t = {} {unit}: E_inc {}, E_prep {}, E_meas {} (E_device {}); {DEVICE_NOTE}\n\n",
            show(args.time),
            show(inc),
            show(prep),
            show(meas),
            show(d.term(set.s_o, args.time)),
        ));
    }
    s.push_str(&format!(
        "  {:<28} {:>14} {:>14} {:>12}\n",
        "question", "stochastic", "worst case", "gain"
    ));
    s.push_str("(a) largest scale factor on every amplitude\n");
    row(&mut s, "averaged (E_avg + E_shot)", &scale[0], false, "");
    row(&mut s, "single evolution (E_1)", &scale[1], false, "");
    s.push_str(&format!(
        "(b) longest time at the recorded amplitudes ({unit})\n"
    ));
    row(&mut s, "averaged (E_avg + E_shot)", &time[0], false, "");
    row(&mut s, "single evolution (E_1)", &time[1], false, "");
    let side = match prob.geometry {
        Geometry::Chain => "chain length",
        Geometry::Square => "L of L x L",
        _ => "L of L x L x L",
    };
    s.push_str(&format!(
        "(c) largest system ({side}) at the recorded amplitudes and time\n"
    ));
    match (size, resize) {
        (Some(v), _) => {
            row(&mut s, "averaged (E_avg + E_shot)", &v[0], true, "");
            row(&mut s, "single evolution (E_1)", &v[1], true, "");
        }
        (None, why) => s.push_str(&format!(
            "  not available: {}\n",
            why.as_deref().unwrap_or("unknown")
        )),
    }
    if !table.is_empty() {
        s.push_str("(d) largest scale factor by system size\n");
        s.push_str(&format!(
            "  {:>8} {:>9} {:>12} {:>12} {:>10} {:>12} {:>12} {:>10}\n",
            "side", "sources", "avg", "avg wc", "gain", "E_1", "E_1 wc", "gain"
        ));
        for (l, m, p) in table {
            let g = |p: &Pair| p.gain().map(show).unwrap_or_else(|| "-".into());
            s.push_str(&format!(
                "  {l:>8} {m:>9} {:>12} {:>12} {:>10} {:>12} {:>12} {:>10}\n",
                show_answer(p[0].stochastic, false),
                show_answer(p[0].worst, false),
                g(&p[0]),
                show_answer(p[1].stochastic, false),
                show_answer(p[1].worst, false),
                g(&p[1]),
            ));
        }
        for (w, slope) in slopes {
            if let Some(x) = slope {
                s.push_str(&format!(
                    "  fitted exponent of the {w} gain against the number of sources: {:.3} \
                     (1/2 is the square-root law)\n",
                    x
                ));
            }
        }
    }
    if let Some(r) = rates {
        rate_rows(&mut s, set, r, unit);
    }
    s.push_str(&format!(
        "(g) longest correlation time of every source ({unit}; noise drawn again every tau)\n"
    ));
    for (label, a) in [
        ("averaged (E_avg + E_shot)", correlation[0]),
        ("single evolution (E_1)", correlation[1]),
    ] {
        let text = match a {
            Answer::Unlimited => "any (static is within)".to_string(),
            other => show_answer(other, false),
        };
        s.push_str(&format!(
            "  {label:<28} {text:>14} {:>14} {:>12}\n",
            "-", "-"
        ));
    }
    s.push_str(
        "\nstochastic: the global bounds of docs/method.md §3 (cancellation between independent \
         sources); worst case: no cancellation; gain: stochastic / worst case. \"none\": the \
         target is below the error left without Hamiltonian noise (the shot term, and the \
         device errors); \"unlimited\": the target is at least the spread of the \
         observable (or the search limit was reached).\n",
    );
    s.push_str(
        "planning uses the model statement alone, at the whole confidence level: a certificate \
         also intersects it with the data statement (an interval from the recorded \
         realizations, docs/method.md section 6), which cannot be planned before the data exist \
         and can only narrow the certified interval, though the model statement then gets only \
         its share of the failure probability (certify --data-share).\n",
    );
    s
}

/// The light-cone answers for `--support` (docs/budget.md, "Local observables").
struct LocalAnswers {
    sites: Vec<usize>,
    /// `s_O`: a bound this large is vacuous.
    spread: f64,
    /// At the planned point: the terms, and whether the light cone was computed.
    at_point: crate::bounds::global::PointBounds,
    light_cone: String,
    light_cone_used: bool,
    scale: [Answer; 2],
    time: [Answer; 2],
    size: Option<[Answer; 2]>,
}

fn local_answers(
    args: &BudgetArgs,
    prob: &Problem,
    shape: &[usize],
    sites: &[usize],
    resizable: bool,
) -> crate::Result<LocalAnswers> {
    let n: usize = shape.iter().product();
    let raw: Vec<i128> = sites.iter().map(|&s| s as i128).collect();
    let support = crate::inputs::run_file::checks::check_support(&raw, Some(n))
        .map_err(|m| Error::Options(format!("--support: {m}")))?;
    if support.is_empty() {
        return Err(Error::Options(
            "--support: give at least one site (a global observable needs no --support)".into(),
        ));
    }
    let plan = local::LocalPlan {
        prob,
        shape,
        support: &support,
        bond_norm: args.bond_norm.unwrap_or(0.0),
        energy_unit: args.energy_unit.unwrap_or(FrequencyUnit::RadPerUs),
        spectrum: args.spectrum,
        realizations: args.realizations,
        shots: args.shots,
        confidence: args.confidence,
        points: args.points,
    };
    let (t, target) = (args.time, args.target);
    let at = plan.point(shape, &support, 1.0, t)?;
    let w = [Which::Averaged, Which::Single];
    Ok(LocalAnswers {
        light_cone: at.light_cone.describe(),
        light_cone_used: at.light_cone_used,
        at_point: at.bounds,
        scale: w.map(|w| plan.largest_scale(t, target, w)),
        time: w.map(|w| plan.longest_time(t, target, w)),
        size: resizable.then(|| w.map(|w| plan.largest_side(t, target, w, prob.min_side()))),
        sites: support,
        spread: args.spectrum[1] - args.spectrum[0],
    })
}

fn local_json(l: &LocalAnswers) -> Value {
    let by =
        |v: &[Answer; 2]| json!({ "averaged": answer_json(v[0]), "single": answer_json(v[1]) });
    let p = &l.at_point;
    json!({
        "support": l.sites,
        "errors": {
            "averaged": "half_width: e_avg + e_shot + device terms, the smaller of the light-cone and global statements, as certify (docs/method.md §5)",
            "single": "e_one, one noisy evolution, likewise",
        },
        "light_cone": l.light_cone,
        "light_cone_used_at_point": l.light_cone_used,
        "at_point": { "e_avg": finite(p.e_avg), "e_shot": finite(p.e_shot),
                      "half_width": finite(p.half_width), "e_one": finite(p.e_one),
                      "e_wc": finite(p.e_wc) },
        "scale": by(&l.scale),
        "time_limit": by(&l.time),
        "size": match &l.size {
            Some(v) => by(v),
            None => json!({ "status": "not_available", "reason": "the record lists sites" }),
        },
    })
}

fn local_text(s: &mut String, l: &LocalAnswers, t: f64, unit: &str) {
    let sites: Vec<String> = l.sites.iter().map(|x| x.to_string()).collect();
    let p = &l.at_point;
    let vacuous = |x: f64| {
        if x >= l.spread {
            "vacuous".to_string()
        } else {
            show(x)
        }
    };
    s.push_str(&format!(
        "\n(f) a local observable on sites [{}]: the smaller of the light-cone and global \
         statements at each point, as certify uses them (docs/method.md section 5)\n",
        sites.join(", ")
    ));
    s.push_str(&format!(
        "  at t = {} {unit}: E_avg {}, E_shot {}, half-width {}, E_1 {}; the light-cone \
         statement is {}\n",
        show(t),
        vacuous(p.e_avg),
        show(p.e_shot),
        vacuous(p.half_width),
        vacuous(p.e_one),
        if l.light_cone_used {
            "the smaller here"
        } else {
            "not the smaller here (the global one is used)"
        }
    ));
    s.push_str(&format!(
        "  {:<34} {:>14} {:>14}\n",
        "question", "averaged", "single (E_1)"
    ));
    let line = |s: &mut String, q: &str, v: &[Answer; 2], integer: bool| {
        s.push_str(&format!(
            "  {q:<34} {:>14} {:>14}\n",
            show_answer(v[0], integer),
            show_answer(v[1], integer)
        ));
    };
    line(s, "(a) largest scale factor", &l.scale, false);
    line(s, &format!("(b) longest time ({unit})"), &l.time, false);
    match &l.size {
        Some(v) => line(s, "(c) largest side, support at centre", v, true),
        None => s.push_str("  (c) largest side: not available, the record lists sites\n"),
    }
    s.push_str(
        "  (c) is searched as for the global answers: the light-cone statement's tail term \
         covers the noise sources outside the cone and grows with their number; \"unlimited\" \
         means the search's largest side was reached. vacuous: the bound reaches the \
         observable's range.\n",
    );
}
