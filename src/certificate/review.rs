//! What `quassay review` explains: a certificate body read into plain-language statements
//! for a referee, and the test of a stated error against the certified half-widths.
//!
//! Pure: it reads a body (`serde_json::Value`, as `Certificate::read` gives it) and returns
//! sentences and numbers; problems name JSON pointers into the certificate file. Nothing here
//! recomputes a bound: every number comes from the body, whose digest the caller checked.

use serde_json::{json, Value};

use crate::numbers::short;
use crate::Problem;

/// A number of a column entry: a JSON number, or `"unbounded"` (∞).
fn number(v: &Value) -> Option<f64> {
    match v {
        Value::String(s) if s == "unbounded" => Some(f64::INFINITY),
        v => v.as_f64(),
    }
}

/// A column of numbers at `/body/observables/<k>/<name>`.
fn column(obs: &Value, k: usize, name: &str, problems: &mut Vec<Problem>) -> Vec<f64> {
    let ptr = format!("/body/observables/{k}/{name}");
    match obs[name].as_array() {
        Some(a) => a
            .iter()
            .enumerate()
            .map(|(i, v)| {
                number(v).unwrap_or_else(|| {
                    problems.push(Problem::new(format!("{ptr}/{i}"), "is not a number"));
                    f64::NAN
                })
            })
            .collect(),
        None => {
            problems.push(Problem::new(ptr, "is missing or not an array"));
            Vec::new()
        }
    }
}

/// `max(mean − certified_lower, certified_upper − mean)` per time, when the observable has a
/// data statement (format 1.1); a null end (disjoint statements) gives NaN.
fn certified_reach(
    o: &Value,
    k: usize,
    n_times: usize,
    problems: &mut Vec<Problem>,
) -> Option<Vec<f64>> {
    o.get("certified_lower")?;
    let mean = column(o, k, "mean", problems);
    if mean.len() != n_times {
        problems.push(Problem::new(
            format!("/body/observables/{k}/mean"),
            format!("has {} entries for {n_times} recorded times", mean.len()),
        ));
        return Some(vec![f64::NAN; n_times]);
    }
    let ends = |name: &str, problems: &mut Vec<Problem>| -> Vec<Option<f64>> {
        match o[name].as_array() {
            Some(a) if a.len() == n_times => a.iter().map(Value::as_f64).collect(),
            _ => {
                problems.push(Problem::new(
                    format!("/body/observables/{k}/{name}"),
                    format!("is not an array of {n_times} numbers or nulls"),
                ));
                Vec::new()
            }
        }
    };
    let lower = ends("certified_lower", problems);
    let upper = ends("certified_upper", problems);
    Some(
        mean.iter()
            .zip(lower.iter().zip(&upper))
            .map(|(&m, (l, u))| match (l, u) {
                (Some(l), Some(u)) => (m - l).max(u - m),
                _ => f64::NAN,
            })
            .collect(),
    )
}

/// One observable's certified numbers, per recorded time.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableRows {
    pub name: String,
    pub e_avg: Vec<f64>,
    pub e_shot: Vec<f64>,
    pub e_wc: Vec<f64>,
    pub e_one: Vec<f64>,
    pub statement_used: Vec<String>,
    pub shot_approximate: bool,
    /// Format 1.1, with the data statement: per time, how far the certified interval reaches
    /// from the reported mean, `max(mean − certified_lower, certified_upper − mean)`; NaN
    /// where the model and data statements are disjoint (nothing is certified there).
    pub certified_reach: Option<Vec<f64>>,
    /// `s_O`, the width of the observable's spectrum: a bound this large is vacuous (∞ when
    /// the body does not give it).
    pub spread: f64,
}

impl ObservableRows {
    /// The certified half-width at time index `k`: `E_avg + E_shot`, or with a data statement
    /// the reach of the certified interval from the mean (never larger, since the certified
    /// interval lies inside the model's).
    pub fn half_width(&self, k: usize) -> f64 {
        match &self.certified_reach {
            Some(r) => r[k],
            None => self.e_avg[k] + self.e_shot[k],
        }
    }

    /// The worst time: the largest half-width, earliest on ties (as certify's summary).
    pub fn worst_index(&self) -> Option<usize> {
        (0..self.e_avg.len()).fold(None, |best, k| match best {
            Some(b) if self.half_width(b) >= self.half_width(k) => Some(b),
            _ => Some(k),
        })
    }
}

/// The parts of a body that review reads, checked.
#[derive(Debug, Clone, PartialEq)]
pub struct BodyView {
    pub times: Vec<f64>,
    pub time_unit: String,
    pub observables: Vec<ObservableRows>,
    pub verdict_status: String,
    pub verdict_text: String,
}

/// Reads the per-observable columns and the verdict; every problem is collected.
pub fn read_view(body: &Value) -> Result<BodyView, Vec<Problem>> {
    let mut problems = Vec::new();
    let times: Vec<f64> = match body["run"]["times"].as_array() {
        Some(a) => a.iter().filter_map(Value::as_f64).collect(),
        None => {
            problems.push(Problem::new(
                "/body/run/times",
                "is missing or not an array",
            ));
            Vec::new()
        }
    };
    let mut observables = Vec::new();
    match body["observables"].as_array() {
        Some(list) => {
            for (k, o) in list.iter().enumerate() {
                let name = o["name"].as_str().unwrap_or_default().to_owned();
                if name.is_empty() {
                    problems.push(Problem::new(
                        format!("/body/observables/{k}/name"),
                        "is missing or not a string",
                    ));
                }
                let rows = ObservableRows {
                    name,
                    e_avg: column(o, k, "e_avg", &mut problems),
                    e_shot: column(o, k, "e_shot", &mut problems),
                    e_wc: column(o, k, "e_wc", &mut problems),
                    e_one: column(o, k, "e_one", &mut problems),
                    statement_used: o["statement_used"]
                        .as_array()
                        .map(|a| {
                            a.iter()
                                .map(|s| s.as_str().unwrap_or("global").to_owned())
                                .collect()
                        })
                        .unwrap_or_default(),
                    shot_approximate: o["shot_term"]
                        .as_str()
                        .is_some_and(|s| s.contains("approximate")),
                    certified_reach: certified_reach(o, k, times.len(), &mut problems),
                    spread: o["spread"].as_f64().unwrap_or(f64::INFINITY),
                };
                for (c, len) in [
                    ("e_avg", rows.e_avg.len()),
                    ("e_shot", rows.e_shot.len()),
                    ("e_wc", rows.e_wc.len()),
                    ("e_one", rows.e_one.len()),
                ] {
                    if len != times.len() {
                        problems.push(Problem::new(
                            format!("/body/observables/{k}/{c}"),
                            format!("has {len} entries for {} recorded times", times.len()),
                        ));
                    }
                }
                observables.push(rows);
            }
        }
        None => problems.push(Problem::new(
            "/body/observables",
            "is missing or not an array",
        )),
    }
    let verdict_status = body["verdict"]["status"]
        .as_str()
        .unwrap_or("missing")
        .to_owned();
    let verdict_text = body["verdict"]["text"].as_str().unwrap_or("").to_owned();
    if problems.is_empty() {
        Ok(BodyView {
            times,
            time_unit: body["run"]["time_unit"].as_str().unwrap_or("").to_owned(),
            observables,
            verdict_status,
            verdict_text,
        })
    } else {
        Err(problems)
    }
}

/// `half_width ≤ claimed`; a NaN half-width supports nothing.
fn supports(half_width: f64, claimed: f64) -> bool {
    half_width <= claimed
}

/// One (observable, time) point of a claim check.
#[derive(Debug, Clone, PartialEq)]
pub struct ClaimPoint {
    pub observable: String,
    pub time_index: usize,
    pub time: f64,
    pub e_avg: f64,
    pub e_shot: f64,
    pub half_width: f64,
}

impl ClaimPoint {
    fn to_json(&self) -> Value {
        json!({
            "observable": self.observable, "time_index": self.time_index, "time": self.time,
            "e_avg": self.e_avg, "e_shot": self.e_shot, "half_width": self.half_width,
        })
    }
}

/// Whether a certificate supports a stated error, with the numbers.
#[derive(Debug, Clone, PartialEq)]
pub struct ClaimAnswer {
    pub claimed: f64,
    pub supported: bool,
    /// The points checked.
    pub points: usize,
    /// The largest half-width among them.
    pub largest: Option<ClaimPoint>,
    /// The first point (observable order, then time) whose half-width exceeds the claim.
    pub first_excess: Option<ClaimPoint>,
    /// Whether the numbers alone would support the claim (before the verdict is considered).
    pub numbers_support: bool,
    /// One sentence saying why.
    pub reason: String,
}

impl ClaimAnswer {
    /// The answer as data (`review --json`).
    pub fn to_json(&self) -> Value {
        json!({
            "claimed_error": self.claimed,
            "supported": self.supported,
            "numbers_support": self.numbers_support,
            "points_checked": self.points,
            "largest_half_width": self.largest.as_ref().map(ClaimPoint::to_json),
            "first_excess": self.first_excess.as_ref().map(ClaimPoint::to_json),
            "reason": self.reason,
        })
    }
}

/// Does the certificate support the error `claimed` for the observable `only` (all if `None`)
/// at every recorded time `≤ until` (all if `None`)? Supported iff every selected half-width
/// `E_avg + E_shot ≤ claimed` and the verdict is not `inconsistent`: a certificate whose data
/// contradict its own noise record supports no claim, because every bound rests on that
/// record. `Err` is a message for the user (an unknown observable, no time selected).
pub fn check_claim(
    view: &BodyView,
    claimed: f64,
    only: Option<&str>,
    until: Option<f64>,
) -> Result<ClaimAnswer, String> {
    let selected: Vec<&ObservableRows> = view
        .observables
        .iter()
        .filter(|o| only.is_none_or(|n| o.name == n))
        .collect();
    if selected.is_empty() {
        let names: Vec<&str> = view.observables.iter().map(|o| o.name.as_str()).collect();
        return Err(format!(
            "the certificate has no observable '{}'; it has: {}",
            only.unwrap_or(""),
            names.join(", ")
        ));
    }
    let times: Vec<usize> = (0..view.times.len())
        .filter(|&k| until.is_none_or(|u| view.times[k] <= u))
        .collect();
    if times.is_empty() {
        return Err(format!(
            "no recorded time is at or before --until {} {}; the earliest is {} {}",
            until.unwrap_or(f64::NAN),
            view.time_unit,
            view.times.first().copied().unwrap_or(f64::NAN),
            view.time_unit
        ));
    }
    let mut largest: Option<ClaimPoint> = None;
    let mut first_excess = None;
    let mut points = 0;
    for o in &selected {
        for &k in &times {
            points += 1;
            let p = ClaimPoint {
                observable: o.name.clone(),
                time_index: k,
                time: view.times[k],
                e_avg: o.e_avg[k],
                e_shot: o.e_shot[k],
                half_width: o.half_width(k),
            };
            // A NaN half-width never supports a claim.
            if first_excess.is_none() && !supports(p.half_width, claimed) {
                first_excess = Some(p.clone());
            }
            if largest.as_ref().is_none_or(|l| p.half_width > l.half_width) {
                largest = Some(p);
            }
        }
    }
    let numbers_support = first_excess.is_none();
    let data = selected.iter().any(|o| o.certified_reach.is_some());
    let inconsistent = view.verdict_status == "inconsistent";
    let supported = numbers_support && !inconsistent;
    let reason = if inconsistent {
        format!(
            "no: the certificate's verdict is inconsistent (the data contradict the noise record \
             its bounds rest on), so it supports no stated error{}",
            if numbers_support {
                ", although its half-widths are below the claim"
            } else {
                ""
            }
        )
    } else if let Some(p) = &first_excess {
        format!(
            "no: at {} t = {} {} the certified half-width {} exceeds the claimed {}",
            p.observable,
            p.time,
            view.time_unit,
            if data {
                format!(
                    "(the reach of the intersection of the model and data statements from the \
                     mean) = {}",
                    p.half_width
                )
            } else {
                format!(
                    "E_avg + E_shot = {} + {} = {}",
                    p.e_avg, p.e_shot, p.half_width
                )
            },
            claimed
        )
    } else {
        let l = largest.as_ref();
        format!(
            "yes: every certified half-width {} at the {points} selected points is at \
             most the claimed {claimed}; the largest is {} ({} at t = {} {})",
            if data {
                "(the reach of the intersection of the model and data statements from the mean)"
            } else {
                "E_avg + E_shot"
            },
            l.map_or(f64::NAN, |p| p.half_width),
            l.map_or("", |p| p.observable.as_str()),
            l.map_or(f64::NAN, |p| p.time),
            view.time_unit
        )
    };
    Ok(ClaimAnswer {
        claimed,
        supported,
        points,
        largest,
        first_excess,
        numbers_support,
        reason,
    })
}

/// The gain of the stochastic statement over the worst case for one observable, at its
/// worst time.
#[derive(Debug, Clone, PartialEq)]
pub struct Gain {
    pub observable: String,
    pub time: f64,
    pub e_avg: f64,
    pub e_wc: f64,
    /// `e_wc / e_avg` (∞ if the worst case is unbounded; NaN if `e_avg` is 0).
    pub gain: f64,
    /// `s_O`: where `e_avg` reaches it, the bound is vacuous and no gain is stated.
    pub spread: f64,
}

/// Gains per observable.
pub fn gains(view: &BodyView) -> Vec<Gain> {
    view.observables
        .iter()
        .filter_map(|o| {
            let k = o.worst_index()?;
            let (e_avg, e_wc) = (o.e_avg[k], o.e_wc[k]);
            Some(Gain {
                observable: o.name.clone(),
                time: view.times.get(k).copied().unwrap_or(f64::NAN),
                e_avg,
                e_wc,
                gain: if e_avg > 0.0 { e_wc / e_avg } else { f64::NAN },
                spread: o.spread,
            })
        })
        .collect()
}

/// The plain-language explanation of a certificate body.
#[derive(Debug, Clone, PartialEq)]
pub struct Explanation {
    /// What is claimed: one sentence per observable, then how the probability was spent.
    pub claim: Vec<String>,
    /// The assumptions as recorded.
    pub assumptions: Vec<String>,
    /// What the data could not test, or flagged.
    pub untested: Vec<String>,
    /// What the model does not cover, as recorded.
    pub not_covered: Vec<String>,
    /// Which statement (global or light-cone) each observable used.
    pub statements: Vec<String>,
    /// Format 1.3: the device-error terms of each observable at its worst time.
    pub device: Vec<DeviceLine>,
    pub gains: Vec<Gain>,
    pub verdict_status: String,
    pub verdict_text: String,
}

fn strings(v: &Value) -> Vec<String> {
    v.as_array()
        .map(|a| {
            a.iter()
                .filter_map(|s| s.as_str().map(str::to_owned))
                .collect()
        })
        .unwrap_or_default()
}

/// Explains a body.
pub fn explain(body: &Value, view: &BodyView) -> Explanation {
    let claim_v = &body["claim"];
    let split = &claim_v["probability_split"];
    let mut claim: Vec<String> = claim_v["per_observable"]
        .as_array()
        .map(|a| {
            a.iter()
                .filter_map(|c| c["text"].as_str().map(str::to_owned))
                .collect()
        })
        .unwrap_or_default();
    let statement = claim_v["statement"].as_str().unwrap_or("unknown");
    // Numbers for people (full precision stays in the certificate and in --json).
    let p = |v: &Value| number(v).map_or_else(|| v.to_string(), short);
    let correction = match split["correction"].as_str() {
        Some(c) if c.starts_with("bonferroni") => format!(
            "the Bonferroni correction{}",
            c.strip_prefix("bonferroni")
                .map(|rest| rest.replace(" x ", " × "))
                .unwrap_or_default()
        ),
        Some(c) if c.starts_with("none") => "no correction (pointwise)".to_string(),
        Some(c) => format!("the correction '{c}'"),
        None => "no correction".to_string(),
    };
    claim.push(format!(
        "Confidence {} ({}): {}.",
        p(&claim_v["confidence"]),
        statement,
        if statement == "simultaneous" {
            "the intervals hold together, at every recorded time and for every observable"
        } else {
            "each interval holds at its own time, not jointly with the others"
        }
    ));
    claim.push(format!(
        "The failure probability {} was split by the rule '{}': {} to the noise fluctuation and \
         {} to the shot noise, over {} points with {correction}; one evolution (E_1) gets {} \
         per point.",
        if split.get("model_statement_total").is_some() {
            format!(
                "of the model statement, {} of the total {},",
                p(&split["model_statement_total"]),
                p(&split["epsilon"])
            )
        } else {
            p(&split["epsilon"])
        },
        split["rule"].as_str().unwrap_or("?"),
        p(&split["noise_fluctuation_total"]),
        p(&split["shot_noise_total"]),
        split["points"],
        p(&split["single_evolution_per_point"]),
    ));
    if split.get("model_statement_total").is_some() {
        claim.push(format!(
            "Two statements are intersected (format 1.{}): the model statement above, at \
             failure probability {} in all, and the data statement, an interval for the mean \
             of the realizations from the values themselves at {} in all ({} per point), \
             widened by the model's systematic and bias terms (or, where it covers one shared \
             draw, by E_avg). The data statement assumes independent realizations with a \
             common mean and unbiased shot averages; it needs no noise amplitude beyond those \
             terms.",
            body["format_minor"],
            p(&split["model_statement_total"]),
            p(&split["data_statement_total"]),
            p(&split["data_statement_per_point"]),
        ));
        for o in body["observables"].as_array().into_iter().flatten() {
            let d = &o["data_statement"];
            let narrower = d["narrower"]
                .as_array()
                .map_or(0, |a| a.iter().filter(|x| x == &"data").count());
            let n = d["narrower"].as_array().map_or(0, Vec::len);
            let method = d["method"][0].as_str().unwrap_or("?").replace('_', "-");
            // Two-outcome observables (format 1.2): the shots themselves were counted.
            let shots: Vec<u64> = d["shots_counted"]
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(Value::as_u64)
                .collect();
            let counted = match (shots.iter().min(), shots.iter().max()) {
                (Some(lo), Some(hi)) => format!(
                    ", counting the outcomes of all {} shots behind each time, which the run \
                     file declares two-valued",
                    if lo == hi {
                        lo.to_string()
                    } else {
                        format!("{lo} to {hi}")
                    }
                ),
                _ => String::new(),
            };
            claim.push(format!(
                "{}: the data statement ({method} interval{counted}) is the narrower at \
                 {narrower} of {n} times.",
                o["name"].as_str().unwrap_or("?")
            ));
        }
    }

    let mut untested = Vec::new();
    let r = body["run"]["n_realizations"].as_u64().unwrap_or(0);
    if r == 1 {
        untested.push(
            "One realization only: the spread between realizations cannot be measured, so the \
             variance checks of the noise amplitudes were not possible."
                .to_string(),
        );
    }
    match body["noise"]["redrawn"].as_str() {
        Some("once") => untested.push(
            "The noise is drawn once for the whole dataset: averaging realizations does not \
             reduce its fluctuation, and the realizations cannot reveal its size."
                .to_string(),
        ),
        Some("every_shot") => untested.push(
            "The noise is redrawn every shot: its fluctuation is inside the shot noise, and the \
             variance checks test only the shot noise."
                .to_string(),
        ),
        _ => {}
    }
    // Format 1.4: declared correlation times, which the data do not test.
    let windowed: Vec<String> = body["noise"]["sources"]
        .as_array()
        .into_iter()
        .flatten()
        .filter(|s| s["time_model"]["kind"] == "windows")
        .map(|s| {
            let c = &s["time_model"]["correlation_time"];
            format!(
                "{} (tau = {} {})",
                s["name"].as_str().unwrap_or("?"),
                c["value"].as_f64().map_or_else(|| "?".into(), short),
                c["unit"].as_str().unwrap_or("?")
            )
        })
        .collect();
    if !windowed.is_empty() {
        untested.push(format!(
            "Correlation times are declared, not measured, for {}: the noise is taken to be drawn \
             again in every window, which lowers the fluctuation and bias terms. The recorded \
             data do not test this; a declared time shorter than the device's makes the \
             intervals too narrow.",
            windowed.join(", ")
        ));
    }
    for o in &view.observables {
        if o.shot_approximate {
            untested.push(format!(
                "{}: the shot term comes from standard errors by a normal approximation; it is \
                 approximate, not a bound.",
                o.name
            ));
        }
    }
    let checks = &body["checks"];
    let device = &body["noise"]["device"];
    let declares_prep_or_readout =
        device.get("preparation").is_some() || device.get("readout").is_some();
    if checks["status"].as_str() == Some("not_performed") {
        untested.push(format!(
            "The consistency checks were not performed: {}.",
            checks["reason"].as_str().unwrap_or("no reason recorded")
        ));
    }
    if checks["variance"]["status"].as_str() == Some("not_possible") {
        untested.push(format!(
            "Variance checks not possible: {}.",
            checks["variance"]["reason"]
                .as_str()
                .unwrap_or("no reason recorded")
        ));
    }
    for c in checks["observables"].as_array().into_iter().flatten() {
        let name = c["name"].as_str().unwrap_or("?");
        if c["ideal_reference"].is_null() {
            untested.push(format!(
                "{name}: no ideal reference trace, so the offset of the mean from the ideal \
                 model could not be tested."
            ));
        }
        match c["t0"]["status"].as_str() {
            Some("no_time_zero") => untested.push(format!(
                "{name}: the run records no t = 0, so preparation and measurement errors could \
                 not be tested where no Hamiltonian error has acted."
            )),
            Some("checked") if c["t0"]["rejected"] == true => untested.push(format!(
                "{name}: FLAG at t = 0: the data fail a test where no Hamiltonian error has \
                 acted, which points to preparation or measurement errors {}.",
                if declares_prep_or_readout {
                    "larger than the noise record declares"
                } else {
                    "(not covered)"
                }
            )),
            _ => {}
        }
    }
    match view.verdict_status.as_str() {
        "inconsistent" => untested.push(format!(
            "VERDICT INCONSISTENT: {} The intervals hold only if the noise record is right.",
            view.verdict_text
        )),
        "not_tested" => untested.push(format!(
            "Verdict not tested: {} The noise record is taken on trust.",
            view.verdict_text
        )),
        _ => {}
    }

    let statements = view
        .observables
        .iter()
        .map(|o| {
            let lc = o
                .statement_used
                .iter()
                .filter(|s| *s == "light_cone")
                .count();
            let n = o.statement_used.len();
            match lc {
                0 => format!("{}: the global statement at all {n} times.", o.name),
                k if k == n => format!("{}: the light-cone statement at all {n} times.", o.name),
                k => format!(
                    "{}: the light-cone statement at {k} of {n} times, the global one at the \
                     others (the smaller of the two at each time).",
                    o.name
                ),
            }
        })
        .collect();
    Explanation {
        claim,
        assumptions: strings(&body["assumptions"]),
        untested,
        not_covered: strings(&body["not_covered"]),
        statements,
        device: device_lines(body, view),
        gains: gains(view),
        verdict_status: view.verdict_status.clone(),
        verdict_text: view.verdict_text.clone(),
    }
}

/// The device-error terms of one observable at its worst time: a sentence with short numbers,
/// and the same in full precision for `--json`.
#[derive(Debug, Clone, PartialEq)]
pub struct DeviceLine {
    pub text: String,
    pub data: Value,
}

/// Format 1.3: per observable with device terms, each term at the observable's worst time and
/// what it adds to `E_avg` there.
fn device_lines(body: &Value, view: &BodyView) -> Vec<DeviceLine> {
    let mut lines = Vec::new();
    for (o, rows) in body["observables"]
        .as_array()
        .into_iter()
        .flatten()
        .zip(&view.observables)
    {
        let Some(k) = o["e_device"].as_array().and(rows.worst_index()) else {
            continue;
        };
        let at = |key: &str| o[key].as_array().and_then(|a| a.get(k)).and_then(number);
        let time = view.times.get(k).copied().unwrap_or(f64::NAN);
        let e_avg = rows.e_avg.get(k).copied().unwrap_or(f64::NAN);
        let e_device = at("e_device").unwrap_or(f64::NAN);
        let mut parts = Vec::new();
        let mut data = json!({
            "observable": rows.name, "time": num_json(time), "e_device": num_json(e_device),
            "e_avg": num_json(e_avg),
        });
        for (key, name) in [
            ("e_incoherent", "E_inc"),
            ("e_preparation", "E_prep"),
            ("e_readout", "E_meas"),
        ] {
            match (&o[key], at(key)) {
                (_, Some(x)) => {
                    parts.push(format!("{name} {}", short(x)));
                    data[key] = num_json(x);
                }
                (Value::String(reason), None) => {
                    parts.push(format!("{name} {reason}"));
                    data[key] = json!(reason);
                }
                _ => {}
            }
        }
        let text = format!(
            "{}: at t = {} {} (its worst time), {}; together E_device {}, added to E_avg {} with \
             certainty.",
            rows.name,
            short(time),
            view.time_unit,
            parts.join(", "),
            short(e_device),
            short(e_avg),
        );
        lines.push(DeviceLine { text, data });
    }
    lines
}

fn num_json(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else if x.is_nan() {
        Value::Null
    } else {
        json!("unbounded")
    }
}

impl Explanation {
    /// The explanation as data.
    pub fn to_json(&self) -> Value {
        let mut v = json!({
            "claim": self.claim,
            "assumptions": self.assumptions,
            "not_tested": self.untested,
            "not_covered": self.not_covered,
            "statements": self.statements,
            "gain": self.gains.iter().map(|g| json!({
                "observable": g.observable, "time": g.time, "e_avg": g.e_avg,
                "e_wc": num_json(g.e_wc), "gain": num_json(g.gain),
            })).collect::<Vec<_>>(),
            "verdict": { "status": self.verdict_status, "text": self.verdict_text },
        });
        // Format 1.3 only, so that the output for earlier certificates is unchanged.
        if !self.device.is_empty() {
            v["device_errors"] = Value::Array(self.device.iter().map(|d| d.data.clone()).collect());
        }
        v
    }

    /// The explanation as text for a referee.
    pub fn to_text(&self, time_unit: &str) -> String {
        let mut s = String::new();
        let list = |s: &mut String, title: &str, items: &[String]| {
            s.push_str(title);
            s.push('\n');
            if items.is_empty() {
                s.push_str("  (none)\n");
            }
            for i in items {
                s.push_str("  - ");
                s.push_str(i);
                s.push('\n');
            }
        };
        list(&mut s, "What is claimed:", &self.claim);
        list(
            &mut s,
            "Assumed (not tested by the tool unless said below):",
            &self.assumptions,
        );
        list(
            &mut s,
            "What the data could not test, and flags:",
            &self.untested,
        );
        list(
            &mut s,
            "Not covered by the model at all:",
            &self.not_covered,
        );
        list(&mut s, "Which bound was used:", &self.statements);
        if !self.device.is_empty() {
            list(
                &mut s,
                "Device errors (incoherent, preparation, readout; docs/method.md section 7):",
                &self
                    .device
                    .iter()
                    .map(|d| d.text.clone())
                    .collect::<Vec<_>>(),
            );
        }
        s.push_str(
            "Gain of the stochastic statement over the worst case (at each observable's worst \
             time):\n",
        );
        for g in &self.gains {
            let vacuous = |x: f64| {
                if x >= g.spread {
                    format!(
                        "{} (reaches the observable's range {}: vacuous)",
                        short(x),
                        short(g.spread)
                    )
                } else {
                    short(x)
                }
            };
            let gain = if g.e_avg >= g.spread {
                "no gain stated (E_avg is vacuous)".to_string()
            } else if g.gain.is_infinite() {
                "unbounded (the worst case is infinite)".to_string()
            } else if g.gain.is_nan() {
                "- (E_avg = 0)".to_string()
            } else {
                format!("{}x", short(g.gain))
            };
            s.push_str(&format!(
                "  - {}: at t = {} {time_unit}, worst case {} vs E_avg {}: {gain}\n",
                g.observable,
                short(g.time),
                vacuous(g.e_wc),
                vacuous(g.e_avg)
            ));
        }
        s.push_str(&format!(
            "Verdict: {} — {}\n",
            self.verdict_status, self.verdict_text
        ));
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn body(verdict: &str) -> Value {
        json!({
            "run": { "times": [0.0, 1.0, 2.0], "time_unit": "us", "n_realizations": 1 },
            "observables": [
                { "name": "A", "e_avg": [0.0, 0.1, 0.2], "e_shot": [0.01, 0.01, 0.01],
                  "e_wc": [0.0, 0.5, "unbounded"], "e_one": [0.0, 0.2, 0.3],
                  "statement_used": ["global", "light_cone", "light_cone"],
                  "shot_term": "normal approximation from standard errors (approximate)" },
                { "name": "B", "e_avg": [0.0, 0.05, 0.4], "e_shot": [0.02, 0.02, 0.02],
                  "e_wc": [0.0, 0.3, 1.0], "e_one": [0.0, 0.1, 0.5],
                  "statement_used": ["global", "global", "global"],
                  "shot_term": "hoeffding from shot counts" }
            ],
            "checks": { "status": "performed", "variance": { "status": "not_possible",
                        "reason": "one realization" },
                        "observables": [ { "name": "A", "ideal_reference": null,
                                           "t0": { "status": "checked", "rejected": true } } ] },
            "verdict": { "status": verdict, "text": "words" },
        })
    }

    #[test]
    fn with_a_data_statement_the_claim_is_tested_against_the_certified_reach() {
        let mut b = body("consistent");
        // B: mean 0.5 at every time; the certified interval reaches 0.25 from it at t = 2
        // (well inside the model's 0.42), and nothing is certified at t = 1 (disjoint).
        b["observables"][1]["mean"] = json!([0.5, 0.5, 0.5]);
        b["observables"][1]["certified_lower"] = json!([0.49, null, 0.3]);
        b["observables"][1]["certified_upper"] = json!([0.52, null, 0.75]);
        let v = read_view(&b).unwrap();
        let reach = v.observables[1].certified_reach.as_ref().unwrap();
        assert!((reach[0] - 0.02).abs() < 1e-15 && reach[1].is_nan());
        assert!((v.observables[1].half_width(2) - 0.25).abs() < 1e-15);
        // The disjoint time supports no claim, however large.
        assert!(!check_claim(&v, 10.0, Some("B"), None).unwrap().supported);
        // At t = 0 alone the certified reach decides (0.02).
        assert!(
            check_claim(&v, 0.3, Some("B"), Some(0.5))
                .unwrap()
                .supported
        );
        // A mean column of another length is a problem with its pointer.
        b["observables"][1]["mean"] = json!([0.5]);
        let problems = read_view(&b).unwrap_err();
        assert!(
            problems.iter().any(|p| p.path.ends_with("/1/mean")),
            "{problems:?}"
        );
    }

    #[test]
    fn a_claim_just_above_every_half_width_is_supported_and_just_below_is_not() {
        let v = read_view(&body("consistent")).unwrap();
        // Largest half-width: B at t = 2, 0.4 + 0.02 = 0.42.
        let yes = check_claim(&v, 0.42 + 1e-12, None, None).unwrap();
        assert!(yes.supported, "{}", yes.reason);
        assert_eq!(yes.largest.as_ref().unwrap().observable, "B");
        let no = check_claim(&v, 0.42 - 1e-12, None, None).unwrap();
        assert!(!no.supported);
        assert_eq!(no.first_excess.as_ref().unwrap().time_index, 2);
        // Restricting the observable or the time changes the answer.
        assert!(check_claim(&v, 0.22, Some("A"), None).unwrap().supported);
        assert!(check_claim(&v, 0.12, None, Some(1.5)).unwrap().supported);
        assert!(check_claim(&v, 0.1, Some("C"), None).is_err());
        assert!(check_claim(&v, 0.1, None, Some(-1.0)).is_err());
    }

    #[test]
    fn an_inconsistent_verdict_supports_no_claim() {
        let v = read_view(&body("inconsistent")).unwrap();
        let a = check_claim(&v, 10.0, None, None).unwrap();
        assert!(a.numbers_support && !a.supported);
        assert!(a.reason.contains("inconsistent"));
    }

    #[test]
    fn the_explanation_names_what_could_not_be_tested() {
        let b = body("not_tested");
        let v = read_view(&b).unwrap();
        let e = explain(&b, &v);
        let all = e.untested.join("\n");
        for needle in [
            "One realization",
            "normal approximation",
            "no ideal reference",
            "t = 0",
        ] {
            assert!(all.contains(needle), "{needle}: {all}");
        }
        assert!(e.statements[0].contains("light-cone statement at 2 of 3"));
        // Gain at the worst time: A's worst time is t = 2 where e_wc is unbounded.
        assert!(e.gains[0].gain.is_infinite());
        assert!((e.gains[1].gain - 1.0 / 0.4).abs() < 1e-12);
    }

    #[test]
    fn a_short_column_is_a_problem_with_its_pointer() {
        let mut b = body("consistent");
        b["observables"][1]["e_shot"] = json!([0.1]);
        let p = read_view(&b).unwrap_err();
        assert_eq!(p[0].path, "/body/observables/1/e_shot");
    }
}
