//! The entry points of the scenario reader (a file, a text, a parsed value) and the top level
//! of the document: its keys, the format check, and the preparation error. Each part is read
//! by its own module and every problem is collected before failing (docs/scenario.md).

use std::path::Path;

use serde_json::Value;

use crate::error::{Error, InputKind, Problem};
use crate::model::{FrequencyUnit, Lattice, TimeUnit};

use super::noise::{noise, true_noise};
use super::observables::observables;
use super::system::{hamiltonian, initial_state, lattice, times};
use super::*;
use crate::inputs::json_reader::{fix_root, prefix, Reader};

const TOP_KEYS: [&str; 18] = [
    "format",
    "format_version",
    "run_id",
    "description",
    "time_unit",
    "energy_unit",
    "lattice",
    "hamiltonian",
    "initial_state",
    "times",
    "observables",
    "realizations",
    "shots",
    "seed",
    "noise",
    "true_noise",
    "preparation_error",
    "$schema",
];

/// Reads and checks a scenario file.
pub fn read_scenario(path: &Path) -> crate::Result<Scenario> {
    // A regular file only: a FIFO would block the read forever (tests/hostile.rs).
    let bytes = crate::inputs::regular::read_regular(
        path,
        "a scenario (JSON, format quassay-scenario v1)",
    )?;
    let fail = |problems| Error::Input {
        kind: InputKind::Scenario,
        file: path.to_path_buf(),
        problems,
    };
    let text = std::str::from_utf8(&bytes).map_err(|e| {
        fail(vec![Problem::new(
            "/",
            format!(
                "is not UTF-8 (first bad byte at offset {}); save the file as UTF-8",
                e.valid_up_to()
            ),
        )])
    })?;
    parse_scenario(text).map_err(fail)
}

/// Checks a scenario given as text.
pub fn parse_scenario(text: &str) -> Result<Scenario, Vec<Problem>> {
    let value: Value = serde_json::from_str(text)
        .map_err(|e| vec![crate::inputs::json_reader::syntax_problem(&e)])?;
    scenario_from_value(&value)
}

/// Checks a scenario given as a parsed JSON value.
pub fn scenario_from_value(value: &Value) -> Result<Scenario, Vec<Problem>> {
    let mut rd = Reader {
        problems: Vec::new(),
    };
    let Some(top) = rd.object(value, "", &TOP_KEYS) else {
        return Err(fix_root(rd.problems));
    };
    match top.get("format").map(|v| v.as_str()) {
        Some(Some("quassay-scenario")) => {}
        Some(_) => rd.push("/format", "must be \"quassay-scenario\""),
        None => rd.push(
            "/format",
            "is missing; add \"format\": \"quassay-scenario\"",
        ),
    }
    match top.get("format_version").map(|v| v.as_u64()) {
        Some(Some(1)) => {}
        Some(_) => rd.push(
            "/format_version",
            "must be 1 (the only version this tool reads)",
        ),
        None => rd.push("/format_version", "is missing; add \"format_version\": 1"),
    }
    let run_id = rd
        .required(top, "", "run_id")
        .and_then(|v| rd.string(v, "/run_id"))
        .map(str::to_owned);
    if run_id.as_deref() == Some("") {
        rd.push("/run_id", "must not be empty");
    }
    let description = top
        .get("description")
        .and_then(|v| rd.string(v, "/description"))
        .map(str::to_owned);
    let time_unit = rd.required(top, "", "time_unit").and_then(|v| {
        let s = rd.string(v, "/time_unit")?;
        let u = TimeUnit::parse(s);
        if u.is_none() {
            rd.push(
                "/time_unit",
                format!("\"{s}\" is not a time unit; use s, ms, us or ns"),
            );
        }
        u
    });
    let energy_unit = rd.required(top, "", "energy_unit").and_then(|v| {
        let s = rd.string(v, "/energy_unit")?;
        let u = FrequencyUnit::parse(s);
        if u.is_none() {
            rd.push(
                "/energy_unit",
                format!(
                    "\"{s}\" is not a frequency unit; use one of {}",
                    FrequencyUnit::accepted()
                ),
            );
        }
        u
    });
    let lattice = rd
        .required(top, "", "lattice")
        .and_then(|v| lattice(&mut rd, v));
    let n = lattice.as_ref().map(Lattice::n_sites);

    let mut ham = None;
    if let (Some(l), Some(v)) = (&lattice, rd.required(top, "", "hamiltonian")) {
        ham = hamiltonian(&mut rd, v, l);
    }
    let initial_state = match (n, rd.required(top, "", "initial_state")) {
        (Some(n), Some(v)) => initial_state(&mut rd, v, n, lattice.as_ref()),
        _ => None,
    };
    let times = rd
        .required(top, "", "times")
        .and_then(|v| times(&mut rd, v));
    let observables = match (&lattice, rd.required(top, "", "observables")) {
        (Some(l), Some(v)) => observables(&mut rd, v, l),
        _ => None,
    };
    let realizations = rd
        .required(top, "", "realizations")
        .and_then(|v| rd.integer(v, "/realizations", 1, MAX_REALIZATIONS as u64))
        .map(|r| r as usize);
    let shots = rd
        .required(top, "", "shots")
        .and_then(|v| rd.integer(v, "/shots", 1, MAX_SHOTS));
    let seed = rd
        .required(top, "", "seed")
        .and_then(|v| rd.integer(v, "/seed", 0, u64::MAX));
    let declared = rd
        .required(top, "", "noise")
        .and_then(|v| noise(&mut rd, v));
    let truth = match (&declared, top.get("true_noise")) {
        (Some(d), Some(t)) => true_noise(&mut rd, t, d, top.get("noise")),
        (Some(d), None) => Some(d.clone()),
        _ => None,
    };
    let preparation_error = top
        .get("preparation_error")
        .map(|v| preparation_error(&mut rd, v));
    if let (Some(l), Some(tu)) = (&lattice, time_unit) {
        if let Some((record, _)) = &declared {
            if let Err(ps) = record.expand(l, tu) {
                rd.problems.extend(prefix(ps, "/noise"));
            }
        }
        if let (Some((record, _)), Some(_)) = (&truth, top.get("true_noise")) {
            if let Err(ps) = record.expand(l, tu) {
                for p in ps {
                    rd.push(
                        "/true_noise",
                        format!("the true noise does not fit the lattice: {p}"),
                    );
                }
            }
        }
    }
    // Sizes.
    if let (Some(r), Some(t), Some(o)) = (realizations, &times, &observables) {
        let count = r.saturating_mul(t.len()).saturating_mul(o.len());
        if count > MAX_VALUES {
            rd.push(
                "/realizations",
                format!(
                    "realizations × times × observables = {count} exceeds {MAX_VALUES}; use fewer"
                ),
            );
        }
    }
    if let (Some(r), Some(s), Some((rec, _))) = (realizations, shots, &truth) {
        if rec.redrawn == crate::model::Redrawn::EveryShot
            && (r as u64).saturating_mul(s) > MAX_SHOT_EVOLUTIONS
        {
            rd.push(
                "/shots",
                format!(
                    "noise redrawn every shot needs realizations × shots = {} evolutions, more \
                     than {MAX_SHOT_EVOLUTIONS}; use fewer shots or realizations",
                    (r as u64).saturating_mul(s)
                ),
            );
        }
    }
    if let Some((record, _)) = &declared {
        device_limits(&mut rd, record, &lattice, &observables, top);
    }
    window_limits(
        &mut rd,
        declared.as_ref().map(|d| &d.0),
        truth.as_ref().map(|t| &t.0),
        times.as_deref(),
        time_unit,
        top,
    );
    if !rd.problems.is_empty() {
        return Err(fix_root(rd.problems));
    }
    match (
        run_id,
        time_unit,
        energy_unit,
        lattice,
        ham,
        initial_state,
        times,
        observables,
        realizations,
        shots,
        seed,
        declared,
        truth,
    ) {
        (
            Some(run_id),
            Some(time_unit),
            Some(energy_unit),
            Some(lattice),
            Some((coupling, coupling_uniform, anisotropy, hx, hz)),
            Some(initial_state),
            Some(times),
            Some(observables),
            Some(realizations),
            Some(shots),
            Some(seed),
            Some((noise, noise_operators)),
            Some((true_noise, true_operators)),
        ) => Ok(Scenario {
            run_id,
            description,
            time_unit,
            energy_unit,
            lattice,
            coupling,
            coupling_uniform,
            anisotropy,
            hx,
            hz,
            initial_state,
            times,
            observables,
            realizations,
            shots,
            seed,
            noise,
            noise_operators,
            true_noise,
            true_operators,
            preparation_error: preparation_error.flatten(),
        }),
        _ => Err(vec![Problem::new(
            "/",
            "is incomplete; see the other messages",
        )]),
    }
}

/// Every source the simulator draws, with the pointer to write in a message: the declared
/// record's, then those the true noise gives itself (`true_noise/sources`, or its
/// `extra_sources` after the declared ones; a true noise built by `scale` alone has copies of
/// the declared sources, already named under `/noise`).
fn simulated_sources<'a>(
    declared: Option<&'a crate::model::NoiseRecord>,
    truth: Option<&'a crate::model::NoiseRecord>,
    top: &serde_json::Map<String, Value>,
) -> Vec<(String, &'a crate::model::NoiseSource)> {
    let mut out: Vec<(String, &crate::model::NoiseSource)> = Vec::new();
    let n_declared = declared.map_or(0, |d| d.sources.len());
    if let Some(d) = declared {
        for (i, s) in d.sources.iter().enumerate() {
            out.push((format!("/noise/sources/{i}"), s));
        }
    }
    let own = top.get("true_noise").and_then(Value::as_object);
    if let (Some(t), Some(own)) = (truth, own) {
        for (i, s) in t.sources.iter().enumerate() {
            if own.contains_key("sources") {
                out.push((format!("/true_noise/sources/{i}"), s));
            } else if i >= n_declared {
                out.push((format!("/true_noise/extra_sources/{}", i - n_declared), s));
            }
        }
    }
    out
}

/// What a scenario with correlation times may not do (docs/simulator.md, "Randomness"): more
/// than [`MAX_WINDOWS`] windows of one source before the last time (each is one more draw and
/// one more operator per evolution), or windows beside device sections (density matrices are
/// evolved only under noise constant during an evolution).
fn window_limits(
    rd: &mut Reader,
    declared: Option<&crate::model::NoiseRecord>,
    truth: Option<&crate::model::NoiseRecord>,
    times: Option<&[f64]>,
    time_unit: Option<crate::model::units::TimeUnit>,
    top: &serde_json::Map<String, Value>,
) {
    let device = declared.is_some_and(|d| !d.device.is_empty());
    let t_max = times.map(|t| t.iter().fold(0.0f64, |m, &x| m.max(x)));
    for (at, src) in simulated_sources(declared, truth, top) {
        let Some((tau, u)) = src.correlation_time else {
            continue;
        };
        let at = format!("{at}/correlation_time");
        if device {
            rd.push(
                &at,
                "cannot be rehearsed beside device sections (the simulator evolves density \
                 matrices only under noise constant during an evolution); remove the \
                 correlation time or the device sections",
            );
        }
        if let (Some(t_max), Some(unit)) = (t_max, time_unit) {
            let windows = t_max / (tau * u.factor_to(unit));
            if windows > MAX_WINDOWS {
                rd.push(
                    &at,
                    format!(
                        "gives {windows:.0} windows before the last time; the simulator draws \
                         at most {MAX_WINDOWS:.0} per source and evolution: use a longer \
                         correlation time or a shorter run"
                    ),
                );
            }
        }
    }
}

/// What a scenario with device errors may not do (docs/scenario.md, "Device errors"): more than
/// [`MAX_DEVICE_SITES`] sites, noise redrawn every shot, a `preparation_error` key beside them,
/// or readout errors for an observable it does not have.
fn device_limits(
    rd: &mut Reader,
    record: &crate::model::NoiseRecord,
    lattice: &Option<crate::model::Lattice>,
    observables: &Option<Vec<ObservableSpec>>,
    top: &serde_json::Map<String, Value>,
) {
    let d = &record.device;
    let Some(first) = [
        ("incoherent", d.incoherent.is_some()),
        ("preparation", d.preparation.is_some()),
        ("readout", d.readout.is_some()),
    ]
    .into_iter()
    .find_map(|(k, present)| present.then_some(k)) else {
        return;
    };
    if let Some(l) = lattice {
        if l.n_sites() > MAX_DEVICE_SITES {
            rd.push(
                format!("/noise/{first}"),
                format!(
                    "rehearsing device errors evolves density matrices, for at most \
                     {MAX_DEVICE_SITES} sites; the lattice has {}: use a smaller one, or leave \
                     the device sections out of the scenario",
                    l.n_sites()
                ),
            );
        }
    }
    if record.redrawn == crate::model::Redrawn::EveryShot {
        rd.push(
            "/noise/redrawn",
            "is every_shot, which with device errors would need one density-matrix evolution \
             per shot; rehearse device errors with every_realization or once",
        );
    }
    if top.contains_key("preparation_error") {
        rd.push(
            "/preparation_error",
            "cannot be combined with device sections; declare the preparation error as the \
             record's `preparation` section (the simulation then uses its trace distance as the \
             flip probability)",
        );
    }
    if let Some(obs) = observables {
        let names: Vec<String> = obs.iter().map(|o| o.name.clone()).collect();
        rd.problems
            .extend(prefix(d.unknown_readout_names(&names), "/noise"));
    }
}

/// `{"flip_probability": q}` with `0 ≤ q ≤ 1`.
fn preparation_error(rd: &mut Reader, v: &Value) -> Option<PreparationError> {
    let path = "/preparation_error";
    let obj = rd.object(v, path, &["flip_probability"])?;
    let q = rd.required(obj, path, "flip_probability").and_then(|q| {
        let qp = "/preparation_error/flip_probability";
        let q = rd.number(q, qp)?;
        if !(0.0..=1.0).contains(&q) {
            rd.push(
                qp,
                format!("is {q}, but a probability must be from 0 to 1; give the chance that one site starts flipped in one shot"),
            );
            return None;
        }
        Some(q)
    })?;
    Some(PreparationError {
        flip_probability: q,
    })
}
