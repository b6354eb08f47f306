//! Reader for simulation scenarios (JSON, format `quassay-scenario` v1, docs/scenario.md).
//!
//! A scenario describes an invented experiment completely: lattice, XXZ Hamiltonian with
//! fields, initial product state, times, observables, realizations, shots, seed, the declared
//! noise record (a `quassay-noise` body whose sources each also name their `operator`) and an
//! optional `true_noise` that the simulator draws from instead. Like every reader it collects
//! all problems of the file, each at a JSON pointer, before failing. The declared noise is
//! checked by the noise-record reader itself ([`crate::inputs::noise_record`]), after the
//! `operator` keys are taken out and each source's `operator_spectrum` is filled in from its
//! operator.

use std::collections::BTreeSet;
use std::path::Path;

use serde_json::{Map, Value};

use crate::error::{Error, InputKind, Problem};
use crate::inputs::noise_record::noise_record_from_value;
use crate::model::noise::Amplitude;
use crate::model::{ActsOn, Boundary, FrequencyUnit, Geometry, Lattice, NoiseRecord, TimeUnit};

/// Largest number of sites (2^20 amplitudes, 16 MiB per state vector).
pub const MAX_SITES: usize = 20;
/// Largest number of realizations.
pub const MAX_REALIZATIONS: usize = 100_000;
/// Largest number of recorded times.
pub const MAX_TIMES: usize = 10_000;
/// Largest number of observables.
pub const MAX_OBSERVABLES: usize = 64;
/// Largest `R · T · K` (values written to the run file).
pub const MAX_VALUES: usize = 10_000_000;
/// Largest number of evolutions `R · S` when the noise is redrawn every shot.
pub const MAX_SHOT_EVOLUTIONS: u64 = 1_000_000;
/// Largest number of shots per estimate.
pub const MAX_SHOTS: u64 = 1_000_000_000_000;
/// Largest number of evolutions of flipped initial states, `R · distinct patterns`, with a
/// preparation error and noise not redrawn every shot (checked once the patterns are drawn).
pub const MAX_PATTERN_EVOLUTIONS: u64 = 1_000_000;

/// A single-site state of the initial product state.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SiteState {
    /// `|0⟩`, Z = +1.
    Zero,
    /// `|1⟩`, Z = −1.
    One,
    /// `(|0⟩ + |1⟩)/√2`, X = +1.
    Plus,
    /// `(|0⟩ − |1⟩)/√2`, X = −1.
    Minus,
    /// `(|0⟩ + i|1⟩)/√2`, Y = +1.
    PlusI,
    /// `(|0⟩ − i|1⟩)/√2`, Y = −1.
    MinusI,
}

impl SiteState {
    /// Labels as written in scenarios.
    pub const ALL: [(SiteState, &'static str); 6] = [
        (SiteState::Zero, "0"),
        (SiteState::One, "1"),
        (SiteState::Plus, "+"),
        (SiteState::Minus, "-"),
        (SiteState::PlusI, "+i"),
        (SiteState::MinusI, "-i"),
    ];

    /// Parses a label.
    pub fn parse(text: &str) -> Option<SiteState> {
        Self::ALL.iter().find(|(_, s)| *s == text).map(|(v, _)| *v)
    }

    /// The label.
    pub fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(v, _)| *v == self)
            .map_or("?", |(_, s)| s)
    }
}

/// A preparation error: in every shot, every site's initial single-site state has X applied
/// to it with probability `flip_probability`, independently of the other sites and shots.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PreparationError {
    /// q, from 0 to 1.
    pub flip_probability: f64,
}

impl SiteState {
    /// The state after X, up to a global phase: `|0⟩ ↔ |1⟩`, `|+i⟩ ↔ |−i⟩` (X|+i⟩ = i|−i⟩),
    /// `|±⟩` unchanged (X|−⟩ = −|−⟩).
    pub fn flipped(self) -> SiteState {
        match self {
            SiteState::Zero => SiteState::One,
            SiteState::One => SiteState::Zero,
            SiteState::PlusI => SiteState::MinusI,
            SiteState::MinusI => SiteState::PlusI,
            SiteState::Plus | SiteState::Minus => self,
        }
    }
}

/// The operator a noise source multiplies.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NoiseOperator {
    X,
    Y,
    Z,
    /// The projector `|1⟩⟨1| = (1 − Z)/2`.
    N,
    XX,
    YY,
    ZZ,
    /// `XX + YY` on two sites.
    XxPlusYy,
}

impl NoiseOperator {
    /// Spellings in scenarios.
    pub const ALL: [(NoiseOperator, &'static str); 8] = [
        (NoiseOperator::X, "X"),
        (NoiseOperator::Y, "Y"),
        (NoiseOperator::Z, "Z"),
        (NoiseOperator::N, "n"),
        (NoiseOperator::XX, "XX"),
        (NoiseOperator::YY, "YY"),
        (NoiseOperator::ZZ, "ZZ"),
        (NoiseOperator::XxPlusYy, "XX+YY"),
    ];

    /// Parses a spelling.
    pub fn parse(text: &str) -> Option<NoiseOperator> {
        Self::ALL.iter().find(|(_, s)| *s == text).map(|(v, _)| *v)
    }

    /// The spelling.
    pub fn as_str(self) -> &'static str {
        Self::ALL
            .iter()
            .find(|(v, _)| *v == self)
            .map_or("?", |(_, s)| s)
    }

    /// Number of sites the operator acts on.
    pub fn arity(self) -> usize {
        match self {
            NoiseOperator::X | NoiseOperator::Y | NoiseOperator::Z | NoiseOperator::N => 1,
            _ => 2,
        }
    }

    /// Its exact eigenvalue range (Paulis and their products ±1; n: 0, 1; XX+YY: −2, 0, 0, 2).
    pub fn spectrum(self) -> [f64; 2] {
        match self {
            NoiseOperator::N => [0.0, 1.0],
            NoiseOperator::XxPlusYy => [-2.0, 2.0],
            _ => [-1.0, 1.0],
        }
    }
}

/// One Pauli product of an observable, with its weight.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableTerm {
    /// Letters `X`, `Y`, `Z`, one per site.
    pub letters: String,
    /// Sites, distinct, in the order of the letters.
    pub sites: Vec<usize>,
    /// The weight `w_a`.
    pub weight: f64,
}

/// An observable: one Pauli product, or a weighted sum of products in one product basis.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservableSpec {
    pub name: String,
    pub terms: Vec<ObservableTerm>,
    /// Whether it was given as a weighted sum (`over`), and is written with its terms.
    pub averaged: bool,
}

/// A checked scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    pub run_id: String,
    /// The scenario's own description (the run's says in addition that the data are simulated).
    pub description: Option<String>,
    pub time_unit: TimeUnit,
    pub energy_unit: FrequencyUnit,
    pub lattice: Lattice,
    /// `J_e` per bond, in `energy_unit`.
    pub coupling: Vec<f64>,
    /// Whether `J` was given as one number.
    pub coupling_uniform: bool,
    /// Δ.
    pub anisotropy: f64,
    /// `hx_i` per site, in `energy_unit`.
    pub hx: Vec<f64>,
    /// `hz_i` per site, in `energy_unit`.
    pub hz: Vec<f64>,
    pub initial_state: Vec<SiteState>,
    /// Recorded times, in `time_unit`.
    pub times: Vec<f64>,
    /// Sorted by name.
    pub observables: Vec<ObservableSpec>,
    pub realizations: usize,
    pub shots: u64,
    pub seed: u64,
    /// The declared record (what noise.json says).
    pub noise: NoiseRecord,
    /// One operator per declared source.
    pub noise_operators: Vec<NoiseOperator>,
    /// The record the draws come from.
    pub true_noise: NoiseRecord,
    /// One operator per true source.
    pub true_operators: Vec<NoiseOperator>,
    /// The preparation error, if the scenario has the key `preparation_error`.
    pub preparation_error: Option<PreparationError>,
}

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
    let value: Value = serde_json::from_str(text).map_err(|e| {
        vec![Problem::new(
            "/",
            format!(
                "is not valid JSON (line {}, column {}: {e}); fix the syntax",
                e.line(),
                e.column()
            ),
        )]
    })?;
    scenario_from_value(&value)
}

/// Collects problems while reading.
struct Reader {
    problems: Vec<Problem>,
}

impl Reader {
    fn push(&mut self, path: impl Into<String>, message: impl Into<String>) {
        self.problems.push(Problem::new(path, message));
    }

    fn object<'v>(
        &mut self,
        v: &'v Value,
        path: &str,
        keys: &[&str],
    ) -> Option<&'v Map<String, Value>> {
        let Some(obj) = v.as_object() else {
            self.push(path, "must be a JSON object");
            return None;
        };
        for k in obj.keys() {
            if !keys.contains(&k.as_str()) {
                self.push(
                    format!("{path}/{}", escape(k)),
                    format!(
                        "is not a known key here; known keys are {}",
                        keys.join(", ")
                    ),
                );
            }
        }
        Some(obj)
    }

    fn required<'v>(
        &mut self,
        obj: &'v Map<String, Value>,
        path: &str,
        key: &str,
    ) -> Option<&'v Value> {
        let v = obj.get(key);
        if v.is_none() {
            self.push(format!("{path}/{key}"), "is missing; it is required");
        }
        v
    }

    fn string<'v>(&mut self, v: &'v Value, path: &str) -> Option<&'v str> {
        let s = v.as_str();
        if s.is_none() {
            self.push(path, "must be a string");
        }
        s
    }

    fn number(&mut self, v: &Value, path: &str) -> Option<f64> {
        match v.as_f64() {
            Some(x) if x.is_finite() => Some(x),
            _ => {
                self.push(path, "must be a finite number");
                None
            }
        }
    }

    fn integer(&mut self, v: &Value, path: &str, min: u64, max: u64) -> Option<u64> {
        match v.as_u64() {
            Some(x) if x >= min && x <= max => Some(x),
            _ => {
                self.push(path, format!("must be an integer from {min} to {max}"));
                None
            }
        }
    }

    /// A number for all `count` items or an array of `count` numbers.
    fn per_item(&mut self, v: &Value, path: &str, count: usize, what: &str) -> Option<Vec<f64>> {
        if let Some(arr) = v.as_array() {
            if arr.len() != count {
                self.push(
                    path,
                    format!(
                        "has {} values but the lattice has {count} {what}; give one per {} or a single number",
                        arr.len(),
                        what.trim_end_matches('s')
                    ),
                );
                return None;
            }
            let mut out = Vec::with_capacity(count);
            let mut ok = true;
            for (i, x) in arr.iter().enumerate() {
                match self.number(x, &format!("{path}/{i}")) {
                    Some(x) => out.push(x),
                    None => ok = false,
                }
            }
            ok.then_some(out)
        } else {
            self.number(v, path).map(|x| vec![x; count])
        }
    }
}

/// JSON-pointer escaping of one reference token (RFC 6901).
fn escape(key: &str) -> String {
    key.replace('~', "~0").replace('/', "~1")
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

/// The root pointer is `""` in RFC 6901; messages use `/` for the whole file.
fn fix_root(problems: Vec<Problem>) -> Vec<Problem> {
    problems
        .into_iter()
        .map(|mut p| {
            if p.path.is_empty() {
                p.path = "/".into();
            }
            p
        })
        .collect()
}

fn prefix(problems: Vec<Problem>, base: &str) -> Vec<Problem> {
    problems
        .into_iter()
        .map(|p| {
            let path = if p.path == "/" || p.path.is_empty() {
                base.to_string()
            } else {
                format!("{base}{}", p.path)
            };
            Problem::new(path, p.message)
        })
        .collect()
}

fn lattice(rd: &mut Reader, v: &Value) -> Option<Lattice> {
    let obj = rd.object(
        v,
        "/lattice",
        &["geometry", "shape", "boundary", "n_sites", "bonds"],
    )?;
    let geometry = rd.required(obj, "/lattice", "geometry").and_then(|g| {
        let s = rd.string(g, "/lattice/geometry")?;
        let geo = Geometry::parse(s);
        if geo.is_none() {
            rd.push(
                "/lattice/geometry",
                format!("\"{s}\" is not a geometry; use chain, square, cubic or graph"),
            );
        }
        geo
    })?;
    let boundary = match obj.get("boundary") {
        None if geometry == Geometry::Graph => Some(Boundary::Open),
        None => {
            rd.push(
                "/lattice/boundary",
                "is missing; use \"open\" or \"periodic\"",
            );
            None
        }
        Some(b) => {
            let s = rd.string(b, "/lattice/boundary")?;
            let bd = Boundary::parse(s);
            if bd.is_none() {
                rd.push(
                    "/lattice/boundary",
                    format!("\"{s}\" is not a boundary; use open or periodic"),
                );
            }
            bd
        }
    }?;
    let bonds_of = |rd: &mut Reader, b: &Value| -> Option<Vec<[usize; 2]>> {
        let arr = b.as_array();
        if arr.is_none() {
            rd.push("/lattice/bonds", "must be an array of [site, site] pairs");
        }
        let mut out = Vec::new();
        let mut ok = true;
        for (i, pair) in arr?.iter().enumerate() {
            match pair
                .as_array()
                .map(|p| p.iter().map(Value::as_u64).collect::<Vec<_>>())
            {
                Some(p) if p.len() == 2 && p.iter().all(Option::is_some) => {
                    out.push([p[0]? as usize, p[1]? as usize])
                }
                _ => {
                    rd.push(
                        format!("/lattice/bonds/{i}"),
                        "must be a pair of site indices [a, b]",
                    );
                    ok = false;
                }
            }
        }
        ok.then_some(out)
    };
    let built = if geometry == Geometry::Graph {
        if obj.contains_key("shape") {
            rd.push(
                "/lattice/shape",
                "a graph has no shape; give n_sites and bonds instead",
            );
        }
        let n = rd
            .required(obj, "/lattice", "n_sites")
            .and_then(|x| rd.integer(x, "/lattice/n_sites", 1, MAX_SITES as u64))?;
        let bonds = rd
            .required(obj, "/lattice", "bonds")
            .and_then(|b| bonds_of(rd, b))?;
        Lattice::graph(n as usize, &bonds, boundary)
    } else {
        if obj.contains_key("n_sites") {
            rd.push(
                "/lattice/n_sites",
                "is only for a graph; the shape gives the number of sites",
            );
        }
        let shape_v = rd.required(obj, "/lattice", "shape")?;
        let shape: Option<Vec<usize>> = shape_v
            .as_array()
            .and_then(|a| a.iter().map(|x| x.as_u64().map(|x| x as usize)).collect());
        let Some(shape) = shape else {
            rd.push("/lattice/shape", "must be an array of positive integers");
            return None;
        };
        let total = shape.iter().try_fold(1usize, |a, &l| a.checked_mul(l));
        if total.is_none_or(|t| t > MAX_SITES) {
            rd.push(
                "/lattice/shape",
                format!(
                    "gives {} sites; the simulator handles at most {MAX_SITES} (2^{MAX_SITES} amplitudes)",
                    total.map_or("too many".to_string(), |t| t.to_string())
                ),
            );
            return None;
        }
        let l = Lattice::regular(geometry, &shape, boundary);
        if let (Ok(l), Some(b)) = (&l, obj.get("bonds")) {
            if let Some(bonds) = bonds_of(rd, b) {
                if !l.same_bonds(&bonds) {
                    rd.push("/lattice/bonds", "do not agree with the geometry (order of docs/scenario.md); remove them or fix them");
                }
            }
        }
        l
    };
    match built {
        Ok(l) => Some(l),
        Err(e) => {
            rd.push("/lattice", format!("{e}"));
            None
        }
    }
}

type HamiltonianParts = (Vec<f64>, bool, f64, Vec<f64>, Vec<f64>);

fn hamiltonian(rd: &mut Reader, v: &Value, l: &Lattice) -> Option<HamiltonianParts> {
    let obj = rd.object(v, "/hamiltonian", &["J", "anisotropy", "hx", "hz"])?;
    let jv = rd.required(obj, "/hamiltonian", "J");
    let coupling_uniform = jv.is_some_and(|j| !j.is_array());
    let j = jv.and_then(|j| rd.per_item(j, "/hamiltonian/J", l.n_bonds(), "bonds"));
    let delta = rd
        .required(obj, "/hamiltonian", "anisotropy")
        .and_then(|d| rd.number(d, "/hamiltonian/anisotropy"));
    let n = l.n_sites();
    let field = |rd: &mut Reader, key: &str| match obj.get(key) {
        None => Some(vec![0.0; n]),
        Some(f) => rd.per_item(f, &format!("/hamiltonian/{key}"), n, "sites"),
    };
    let hx = field(rd, "hx");
    let hz = field(rd, "hz");
    Some((j?, coupling_uniform, delta?, hx?, hz?))
}

/// The checkerboard sign of a site: `(−1)^(x+y+z)` from its row-major coordinates on a
/// regular lattice, `(−1)^i` on a graph.
pub fn staggered_sign(l: &Lattice, site: usize) -> f64 {
    let shape = l.shape();
    let mut rest = site;
    let mut sum = 0usize;
    if shape.is_empty() {
        sum = site;
    } else {
        for a in (0..shape.len()).rev() {
            sum += rest % shape[a];
            rest /= shape[a];
        }
    }
    if sum % 2 == 0 {
        1.0
    } else {
        -1.0
    }
}

fn initial_state(
    rd: &mut Reader,
    v: &Value,
    n: usize,
    l: Option<&Lattice>,
) -> Option<Vec<SiteState>> {
    let labels = || {
        SiteState::ALL
            .iter()
            .map(|(_, s)| format!("\"{s}\""))
            .collect::<Vec<_>>()
            .join(", ")
    };
    if let Some(s) = v.as_str() {
        if s == "neel" {
            let l = l?;
            return Some(
                (0..n)
                    .map(|i| {
                        if staggered_sign(l, i) > 0.0 {
                            SiteState::Zero
                        } else {
                            SiteState::One
                        }
                    })
                    .collect(),
            );
        }
        return match SiteState::parse(s) {
            Some(st) => Some(vec![st; n]),
            None => {
                rd.push(
                    "/initial_state",
                    format!("\"{s}\" is not a state label; use one of {}, \"neel\", or an array of labels", labels()),
                );
                None
            }
        };
    }
    let Some(arr) = v.as_array() else {
        rd.push(
            "/initial_state",
            "must be a label, \"neel\", or an array of one label per site",
        );
        return None;
    };
    if arr.len() != n {
        rd.push(
            "/initial_state",
            format!("has {} labels but the lattice has {n} sites", arr.len()),
        );
        return None;
    }
    let mut out = Vec::new();
    let mut ok = true;
    for (i, x) in arr.iter().enumerate() {
        match x.as_str().and_then(SiteState::parse) {
            Some(s) => out.push(s),
            None => {
                rd.push(
                    format!("/initial_state/{i}"),
                    format!("is not a state label; use one of {}", labels()),
                );
                ok = false;
            }
        }
    }
    ok.then_some(out)
}

fn times(rd: &mut Reader, v: &Value) -> Option<Vec<f64>> {
    let list = if let Some(arr) = v.as_array() {
        let mut out = Vec::new();
        let mut ok = true;
        for (i, x) in arr.iter().enumerate() {
            match rd.number(x, &format!("/times/{i}")) {
                Some(t) => out.push(t),
                None => ok = false,
            }
        }
        if !ok {
            return None;
        }
        out
    } else if v.is_object() {
        let obj = rd.object(v, "/times", &["start", "stop", "count"])?;
        let start = rd
            .required(obj, "/times", "start")
            .and_then(|x| rd.number(x, "/times/start"));
        let stop = rd
            .required(obj, "/times", "stop")
            .and_then(|x| rd.number(x, "/times/stop"));
        let count = rd
            .required(obj, "/times", "count")
            .and_then(|x| rd.integer(x, "/times/count", 1, MAX_TIMES as u64));
        let (start, stop, count) = (start?, stop?, count? as usize);
        if count == 1 {
            vec![start]
        } else {
            let step = (stop - start) / (count - 1) as f64;
            (0..count)
                .map(|k| {
                    if k + 1 == count {
                        stop
                    } else {
                        start + step * k as f64
                    }
                })
                .collect()
        }
    } else {
        rd.push(
            "/times",
            "must be an array of times or {\"start\", \"stop\", \"count\"}",
        );
        return None;
    };
    if list.is_empty() || list.len() > MAX_TIMES {
        rd.push("/times", format!("must hold 1 to {MAX_TIMES} times"));
        return None;
    }
    if list[0] < 0.0 {
        rd.push(
            "/times",
            "must not be negative (times count from the start of the evolution)",
        );
        return None;
    }
    if let Some(k) = list.windows(2).position(|w| w[1] < w[0]) {
        rd.push(
            format!("/times/{}", k + 1),
            "is smaller than the time before; times must be non-decreasing",
        );
        return None;
    }
    Some(list)
}

fn observables(rd: &mut Reader, v: &Value, l: &Lattice) -> Option<Vec<ObservableSpec>> {
    let Some(arr) = v.as_array() else {
        rd.push("/observables", "must be an array of observables");
        return None;
    };
    if arr.is_empty() || arr.len() > MAX_OBSERVABLES {
        rd.push(
            "/observables",
            format!("must hold 1 to {MAX_OBSERVABLES} observables"),
        );
        return None;
    }
    let mut out = Vec::new();
    let mut names = BTreeSet::new();
    let mut ok = true;
    for (k, o) in arr.iter().enumerate() {
        let path = format!("/observables/{k}");
        match observable(rd, o, &path, l) {
            Some(spec) => {
                if !names.insert(spec.name.clone()) {
                    rd.push(
                        format!("{path}/name"),
                        format!("\"{}\" is used twice; names must be unique", spec.name),
                    );
                    ok = false;
                }
                out.push(spec);
            }
            None => ok = false,
        }
    }
    out.sort_by(|a, b| a.name.as_bytes().cmp(b.name.as_bytes()));
    ok.then_some(out)
}

fn observable(rd: &mut Reader, v: &Value, path: &str, l: &Lattice) -> Option<ObservableSpec> {
    let obj = rd.object(v, path, &["name", "pauli", "sites", "over", "weights"])?;
    let n = l.n_sites();
    let name = rd
        .required(obj, path, "name")
        .and_then(|x| rd.string(x, &format!("{path}/name")));
    if let Some(nm) = name {
        if nm.is_empty()
            || !nm
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || "_-.".contains(c))
        {
            rd.push(
                format!("{path}/name"),
                "must be letters, digits, '_', '-' or '.' (it names an HDF5 group)",
            );
        }
    }
    let pauli = rd
        .required(obj, path, "pauli")
        .and_then(|x| rd.string(x, &format!("{path}/pauli")));
    if let Some(p) = pauli {
        if p.is_empty() || !p.chars().all(|c| "XYZ".contains(c)) {
            rd.push(
                format!("{path}/pauli"),
                "must be a non-empty string of the letters X, Y and Z, one per site",
            );
            return None;
        }
    }
    let (name, pauli) = (name?.to_string(), pauli?);
    let arity = pauli.chars().count();
    let site_list = |rd: &mut Reader, x: &Value, p: &str| -> Option<Vec<usize>> {
        let sites: Option<Vec<usize>> = x
            .as_array()
            .and_then(|a| a.iter().map(|s| s.as_u64().map(|s| s as usize)).collect());
        let Some(sites) = sites else {
            rd.push(p, "must be an array of site indices");
            return None;
        };
        if sites.len() != arity {
            rd.push(
                p,
                format!(
                    "has {} sites but the Pauli string \"{pauli}\" has {arity} letters",
                    sites.len()
                ),
            );
            return None;
        }
        if let Some(s) = sites.iter().find(|&&s| s >= n) {
            rd.push(
                p,
                format!(
                    "site {s} does not exist; the lattice has sites 0 to {}",
                    n - 1
                ),
            );
            return None;
        }
        let distinct: BTreeSet<_> = sites.iter().collect();
        if distinct.len() != sites.len() {
            rd.push(p, "repeats a site; each site appears once in a product");
            return None;
        }
        Some(sites)
    };
    match (obj.get("sites"), obj.get("over")) {
        (Some(s), None) => {
            if obj.contains_key("weights") {
                rd.push(
                    format!("{path}/weights"),
                    "belongs to an observable given with \"over\"; remove it",
                );
            }
            let sites = site_list(rd, s, &format!("{path}/sites"))?;
            Some(ObservableSpec {
                name,
                terms: vec![ObservableTerm {
                    letters: pauli.to_string(),
                    sites,
                    weight: 1.0,
                }],
                averaged: false,
            })
        }
        (None, Some(over)) => {
            let supports: Vec<Vec<usize>> = match over.as_str() {
                Some("each_site") if arity == 1 => (0..n).map(|i| vec![i]).collect(),
                Some("each_bond") if arity == 2 => l
                    .bonds()
                    .iter()
                    .map(|b| vec![b[0] as usize, b[1] as usize])
                    .collect(),
                Some(s @ ("each_site" | "each_bond")) => {
                    rd.push(
                        format!("{path}/over"),
                        format!(
                            "\"{s}\" needs a Pauli string of {} letter(s), got \"{pauli}\"",
                            if s == "each_site" { 1 } else { 2 }
                        ),
                    );
                    return None;
                }
                Some(s) => {
                    rd.push(format!("{path}/over"), format!("\"{s}\" is not known; use \"each_site\", \"each_bond\" or an array of site lists"));
                    return None;
                }
                None => {
                    let Some(arr) = over.as_array() else {
                        rd.push(
                            format!("{path}/over"),
                            "must be \"each_site\", \"each_bond\" or an array of site lists",
                        );
                        return None;
                    };
                    let mut v = Vec::new();
                    for (a, x) in arr.iter().enumerate() {
                        v.push(site_list(rd, x, &format!("{path}/over/{a}"))?);
                    }
                    v
                }
            };
            if supports.is_empty() {
                rd.push(
                    format!("{path}/over"),
                    "gives no terms (a lattice without bonds?)",
                );
                return None;
            }
            let count = supports.len() as f64;
            let weights: Vec<f64> = match obj.get("weights") {
                None => vec![1.0 / count; supports.len()],
                Some(w) => match w.as_str() {
                    Some("mean") => vec![1.0 / count; supports.len()],
                    Some("sum") => vec![1.0; supports.len()],
                    Some("staggered_mean") => supports
                        .iter()
                        .map(|s| staggered_sign(l, s[0]) / count)
                        .collect(),
                    Some(other) => {
                        rd.push(format!("{path}/weights"), format!("\"{other}\" is not known; use \"mean\", \"sum\", \"staggered_mean\" or an array of numbers"));
                        return None;
                    }
                    None => rd.per_item(w, &format!("{path}/weights"), supports.len(), "terms")?,
                },
            };
            // One product basis: every site must carry the same letter in every term.
            let mut letter_at = vec![None; n];
            for s in &supports {
                for (c, &site) in pauli.chars().zip(s) {
                    match letter_at[site] {
                        None => letter_at[site] = Some(c),
                        Some(d) if d == c => {}
                        Some(d) => {
                            rd.push(
                                format!("{path}/over"),
                                format!("site {site} is measured as {d} in one term and {c} in another; all terms of one observable must be measurable in one product basis"),
                            );
                            return None;
                        }
                    }
                }
            }
            Some(ObservableSpec {
                name,
                terms: supports
                    .into_iter()
                    .zip(weights)
                    .map(|(sites, weight)| ObservableTerm {
                        letters: pauli.to_string(),
                        sites,
                        weight,
                    })
                    .collect(),
                averaged: true,
            })
        }
        (Some(_), Some(_)) => {
            rd.push(path, "gives both \"sites\" and \"over\"; use \"sites\" for one product, \"over\" for a weighted sum");
            None
        }
        (None, None) => {
            rd.push(
                path,
                "needs \"sites\" (one product) or \"over\" (a weighted sum of products)",
            );
            None
        }
    }
}

/// The declared noise: operators taken out, spectra filled in, then the record reader.
fn noise(rd: &mut Reader, v: &Value) -> Option<(NoiseRecord, Vec<NoiseOperator>)> {
    let (body, ops) = split_operators(rd, v, "/noise", "/sources")?;
    match noise_record_from_value(&body) {
        Ok(rec) => Some((rec, ops?)),
        Err(ps) => {
            rd.problems.extend(prefix(ps, "/noise"));
            None
        }
    }
}

/// Takes the `operator` out of every source of `v[sources_key]` and inserts its spectrum.
/// `path` is the pointer of `v`. Returns the new value and the operators (if all are valid).
fn split_operators(
    rd: &mut Reader,
    v: &Value,
    path: &str,
    sources_key: &str,
) -> Option<(Value, Option<Vec<NoiseOperator>>)> {
    let mut body = v.clone();
    let Some(sources) = body.pointer_mut(sources_key).and_then(Value::as_array_mut) else {
        if !v.is_object() {
            rd.push(
                path,
                "must be a JSON object (a quassay-noise record with an operator per source)",
            );
            return None;
        }
        // Let the record reader say what is missing.
        return Some((body, None));
    };
    let mut ops = Some(Vec::new());
    for (i, s) in sources.iter_mut().enumerate() {
        let sp = format!("{path}{sources_key}/{i}");
        let Some(obj) = s.as_object_mut() else {
            ops = None;
            continue; // the record reader reports it
        };
        if obj.contains_key("operator_spectrum") {
            rd.push(
                format!("{sp}/operator_spectrum"),
                "is computed from \"operator\" by the simulator; remove it",
            );
            obj.remove("operator_spectrum");
        }
        let op = match obj.remove("operator") {
            None => {
                rd.push(format!("{sp}/operator"), "is missing; name the operator the source multiplies: X, Y, Z, n (single site) or XX, YY, ZZ, XX+YY (two sites)");
                None
            }
            Some(Value::String(text)) => {
                let op = NoiseOperator::parse(&text);
                if op.is_none() {
                    rd.push(format!("{sp}/operator"), format!("\"{text}\" is not a known operator; use X, Y, Z, n (single site) or XX, YY, ZZ, XX+YY (two sites)"));
                }
                op
            }
            Some(_) => {
                rd.push(
                    format!("{sp}/operator"),
                    "must be a string such as \"Z\" or \"XX+YY\"",
                );
                None
            }
        };
        if let Some(op) = op {
            let arity_ok = match obj.get("acts_on") {
                Some(Value::String(a)) if a == "each_site" => op.arity() == 1,
                Some(Value::String(a)) if a == "each_bond" => op.arity() == 2,
                Some(Value::Object(m)) => {
                    m.get("sites").and_then(Value::as_array).is_none_or(|l| {
                        l.iter()
                            .all(|x| x.as_array().is_none_or(|x| x.len() == op.arity()))
                    })
                }
                _ => true, // the record reader reports a bad acts_on
            };
            if !arity_ok {
                rd.push(
                    format!("{sp}/operator"),
                    format!(
                        "\"{}\" acts on {} site(s), which does not match acts_on",
                        op.as_str(),
                        op.arity()
                    ),
                );
            }
        }
        let spectrum = op.map_or([-1.0, 1.0], NoiseOperator::spectrum);
        obj.insert("operator_spectrum".into(), serde_json::json!(spectrum));
        match (&mut ops, op) {
            (Some(v), Some(op)) => v.push(op),
            _ => ops = None,
        }
    }
    Some((body, ops))
}

/// The true noise: the declared record scaled, extended or replaced (docs/scenario.md).
fn true_noise(
    rd: &mut Reader,
    v: &Value,
    declared: &(NoiseRecord, Vec<NoiseOperator>),
    declared_value: Option<&Value>,
) -> Option<(NoiseRecord, Vec<NoiseOperator>)> {
    let obj = rd.object(v, "/true_noise", &["scale", "sources", "extra_sources"])?;
    if obj.contains_key("sources") && obj.contains_key("extra_sources") {
        rd.push(
            "/true_noise",
            "gives both \"sources\" and \"extra_sources\"; use one",
        );
        return None;
    }
    let scale = match obj.get("scale") {
        None => 1.0,
        Some(s) => match rd.number(s, "/true_noise/scale") {
            Some(x) if x >= 0.0 => x,
            Some(_) => {
                rd.push("/true_noise/scale", "must not be negative");
                return None;
            }
            None => return None,
        },
    };
    // Parse a list of sources under the declared header; map the paths back.
    let parse_list = |rd: &mut Reader,
                      key: &str|
     -> Option<(Vec<crate::model::NoiseSource>, Vec<NoiseOperator>)> {
        let mut body = declared_value?.clone();
        body.as_object_mut()?
            .insert("sources".into(), obj.get(key)?.clone());
        let before = rd.problems.len();
        let (body, ops) = split_operators(rd, &body, "/true_noise", "/sources")?;
        // split_operators names paths /true_noise/sources/i; fix the key.
        for p in rd.problems.iter_mut().skip(before) {
            p.path = p
                .path
                .replacen("/true_noise/sources", &format!("/true_noise/{key}"), 1);
        }
        match noise_record_from_value(&body) {
            Ok(rec) => Some((rec.sources, ops?)),
            Err(ps) => {
                for p in ps {
                    if let Some(rest) = p.path.strip_prefix("/sources") {
                        rd.push(format!("/true_noise/{key}{rest}"), p.message);
                    }
                }
                None
            }
        }
    };
    let (mut base, mut base_ops) = if obj.contains_key("sources") {
        parse_list(rd, "sources")?
    } else {
        (declared.0.sources.clone(), declared.1.clone())
    };
    for s in &mut base {
        s.amplitude = match &s.amplitude {
            Amplitude::Scalar(a) => Amplitude::Scalar(a * scale),
            Amplitude::PerInstance(v) => {
                Amplitude::PerInstance(v.iter().map(|a| a * scale).collect())
            }
        };
    }
    if obj.contains_key("extra_sources") {
        let (extra, extra_ops) = parse_list(rd, "extra_sources")?;
        base.extend(extra);
        base_ops.extend(extra_ops);
    }
    let mut rec = declared.0.clone();
    rec.sources = base;
    Some((rec, base_ops))
}

/// The instances of one source on a lattice (the order of [`NoiseRecord::expand`]).
pub fn instance_supports(acts_on: &ActsOn, l: &Lattice) -> Vec<Vec<usize>> {
    match acts_on {
        ActsOn::EachSite => (0..l.n_sites()).map(|i| vec![i]).collect(),
        ActsOn::EachBond => l
            .bonds()
            .iter()
            .map(|b| vec![b[0] as usize, b[1] as usize])
            .collect(),
        ActsOn::Sites(v) => v.clone(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    pub(crate) fn example() -> Value {
        serde_json::json!({
            "format": "quassay-scenario",
            "format_version": 1,
            "run_id": "invented-chain-4",
            "description": "invented example",
            "time_unit": "us",
            "energy_unit": "MHz",
            "lattice": {"geometry": "chain", "shape": [4], "boundary": "open"},
            "hamiltonian": {"J": 1.0, "anisotropy": 0.5, "hx": 0.2, "hz": [0.0, 0.1, 0.0, 0.1]},
            "initial_state": "neel",
            "times": {"start": 0.0, "stop": 1.0, "count": 5},
            "observables": [
                {"name": "Z_0", "pauli": "Z", "sites": [0]},
                {"name": "stag", "pauli": "Z", "over": "each_site", "weights": "staggered_mean"}
            ],
            "realizations": 3,
            "shots": 100,
            "seed": 7,
            "noise": {
                "format": "quassay-noise",
                "format_version": 1,
                "frequency_unit": "kHz",
                "redrawn": "every_realization",
                "sources": [{
                    "name": "detuning", "acts_on": "each_site", "operator": "Z",
                    "amplitude": 5.0, "distribution": {"family": "uniform"},
                    "mean_offset": 0.0, "mean_offset_uncertainty": 0.0
                }]
            },
            "true_noise": {"scale": 3.0}
        })
    }

    #[test]
    fn the_example_parses_with_neel_state_and_sorted_observables() {
        let s = scenario_from_value(&example()).unwrap();
        assert_eq!(s.lattice.n_sites(), 4);
        assert_eq!(
            s.initial_state,
            [
                SiteState::Zero,
                SiteState::One,
                SiteState::Zero,
                SiteState::One
            ]
        );
        assert_eq!(s.times, [0.0, 0.25, 0.5, 0.75, 1.0]);
        assert_eq!(s.observables[0].name, "Z_0");
        let stag = &s.observables[1];
        assert_eq!(stag.terms.len(), 4);
        assert_eq!(stag.terms[1].weight, -0.25);
        assert_eq!(s.noise.sources[0].operator_spectrum, [-1.0, 1.0]);
        assert_eq!(s.true_noise.sources[0].amplitude, Amplitude::Scalar(15.0));
        assert_eq!(s.true_operators, [NoiseOperator::Z]);
    }

    #[test]
    fn every_problem_is_reported_with_its_pointer() {
        let mut v = example();
        v["colour"] = serde_json::json!("blue");
        v["initial_state"] = serde_json::json!("up");
        v["noise"]["sources"][0]["operator"] = serde_json::json!("W");
        v["observables"][0]["sites"] = serde_json::json!([9]);
        let ps = scenario_from_value(&v).unwrap_err();
        let paths: Vec<&str> = ps.iter().map(|p| p.path.as_str()).collect();
        assert!(paths.contains(&"/colour"), "{ps:?}");
        assert!(paths.contains(&"/initial_state"), "{ps:?}");
        assert!(paths.contains(&"/noise/sources/0/operator"), "{ps:?}");
        assert!(paths.contains(&"/observables/0/sites"), "{ps:?}");
    }

    #[test]
    fn mixed_bases_in_one_average_are_rejected() {
        let mut v = example();
        v["observables"][1] = serde_json::json!({"name": "m", "pauli": "Z", "over": [[0]]});
        v["observables"]
            .as_array_mut()
            .unwrap()
            .push(serde_json::json!(
                {"name": "bad", "pauli": "ZX", "over": [[0, 1], [1, 2]]}
            ));
        let ps = scenario_from_value(&v).unwrap_err();
        assert_eq!(ps.len(), 1, "{ps:?}");
        assert_eq!(ps[0].path, "/observables/2/over");
    }

    #[test]
    fn extra_true_sources_are_checked_and_appended() {
        let mut v = example();
        v["true_noise"] = serde_json::json!({"extra_sources": [{
            "name": "hop", "acts_on": "each_bond", "operator": "XX+YY", "amplitude": 1.0,
            "distribution": {"family": "normal", "sigma": 1.0},
            "mean_offset": 0.0, "mean_offset_uncertainty": 0.0
        }]});
        let s = scenario_from_value(&v).unwrap();
        assert_eq!(s.true_noise.sources.len(), 2);
        assert_eq!(s.true_noise.sources[1].operator_spectrum, [-2.0, 2.0]);
        v["true_noise"]["extra_sources"][0]["operator"] = serde_json::json!("Z");
        let ps = scenario_from_value(&v).unwrap_err();
        assert_eq!(ps[0].path, "/true_noise/extra_sources/0/operator", "{ps:?}");
    }

    #[test]
    fn a_preparation_error_is_read_and_checked() {
        let mut v = example();
        assert_eq!(scenario_from_value(&v).unwrap().preparation_error, None);
        v["preparation_error"] = serde_json::json!({"flip_probability": 0.05});
        let s = scenario_from_value(&v).unwrap();
        assert_eq!(
            s.preparation_error,
            Some(PreparationError {
                flip_probability: 0.05
            })
        );
        for (bad, pointer) in [
            (
                serde_json::json!({"flip_probability": 1.5}),
                "/preparation_error/flip_probability",
            ),
            (
                serde_json::json!({"flip_probability": -0.1}),
                "/preparation_error/flip_probability",
            ),
            (
                serde_json::json!({"flip_probability": "0.1"}),
                "/preparation_error/flip_probability",
            ),
            (serde_json::json!({}), "/preparation_error/flip_probability"),
            (
                serde_json::json!({"flip_probability": 0.1, "per_site": true}),
                "/preparation_error/per_site",
            ),
            (serde_json::json!(0.1), "/preparation_error"),
        ] {
            v["preparation_error"] = bad.clone();
            v["colour"] = serde_json::json!("blue");
            let ps = scenario_from_value(&v).unwrap_err();
            let paths: Vec<&str> = ps.iter().map(|p| p.path.as_str()).collect();
            // Collected with the other problems of the file.
            assert_eq!(paths, ["/colour", pointer], "{bad}");
        }
    }

    #[test]
    fn a_flip_is_x_on_the_single_site_state() {
        // X|0⟩ = |1⟩, X|+i⟩ = i|−i⟩, X|±⟩ = ±|±⟩ (the eigenvalues of X).
        let pairs = [
            (SiteState::Zero, SiteState::One),
            (SiteState::PlusI, SiteState::MinusI),
            (SiteState::Plus, SiteState::Plus),
            (SiteState::Minus, SiteState::Minus),
        ];
        for (a, b) in pairs {
            assert_eq!(a.flipped(), b);
            assert_eq!(b.flipped(), a);
        }
    }
}
