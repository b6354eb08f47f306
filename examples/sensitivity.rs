//! Measures the sensitivity of the consistency checks on a scenario: the smallest factor `f`
//! on the true noise (`"true_noise": {"scale": f}`) at which at least 19 of 20 seeds are
//! flagged as inconsistent by the checks `quassay certify` makes (default options).
//!
//! The check can only be as sharp as the bounds are tight, so this figure measures the whole
//! tool on that scenario (the README states the figures for the bundled examples). Run in
//! release mode:
//!
//! ```text
//! cargo run --release --example sensitivity                      # the bundled examples
//! cargo run --release --example sensitivity -- path/scenario.json ...
//! ```
//!
//! Method: for each scenario, simulate (library `simulate`, seeds 1..=20, the same seeds at
//! every f, so neighbouring factors see the same random streams), write the run and the
//! DECLARED record to a scratch folder, compute the certificate body, and count the seeds
//! whose verdict is inconsistent, stopping as soon as the outcome is decided (19 flagged, or
//! 2 not flagged: a factor far from the threshold costs 2 to 19 simulations, not 20). The
//! factor runs through 1, 2, 5, 10, 20, 50, 100, … until
//! at least 19 seeds are flagged, then the bracket between the last factor below and the
//! first at or above is halved [`REFINE_STEPS`] times on a log scale. The flagged count need
//! not be monotone in f (a larger f can saturate an observable); every evaluated factor is
//! printed, so a non-monotone count is visible. Any existing `true_noise` of the scenario is
//! replaced by the scale alone.

use std::path::{Path, PathBuf};
use std::time::Instant;

use quassay::certificate::body::CertifyOptions;
use quassay::certificate::certify::compute_body;
use quassay::checks::report::ChecksReport;
use quassay::inputs::scenario::parse_scenario;
use quassay::outputs::noise_record::to_json_string;
use quassay::outputs::run_file::{write_run, WriteOptions};
use quassay::simulate::run::simulate;
use serde_json::{json, Value};

/// Seeds per factor.
const SEEDS: u64 = 20;
/// Flagged seeds required.
const AT_LEAST: usize = 19;
/// Largest factor tried before giving up.
const LARGEST: f64 = 1e5;
/// Log-scale halvings of the final bracket.
const REFINE_STEPS: usize = 3;

/// What one factor gave.
struct Tally {
    factor: f64,
    flagged: usize,
    /// Seeds simulated: the count stops once the outcome is decided (19 flagged, or 2 not).
    evaluated: usize,
    /// Median over the simulated seeds of the largest implied noise scale over the observables.
    median_scale: Option<f64>,
    /// Median over flagged seeds of the number of failed tests.
    median_failures: usize,
}

fn main() {
    let mut paths: Vec<PathBuf> = std::env::args_os().skip(1).map(PathBuf::from).collect();
    if paths.is_empty() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR"));
        paths = ["example_runs/chain12", "example_runs/square3x4"]
            .iter()
            .map(|d| root.join(d).join("scenario.json"))
            .collect();
    }
    let mut failed = false;
    for p in &paths {
        if let Err(e) = measure(p) {
            eprintln!("{}: {e}", p.display());
            failed = true;
        }
    }
    if failed {
        std::process::exit(1);
    }
}

fn measure(path: &Path) -> Result<(), String> {
    let text = std::fs::read_to_string(path).map_err(|e| e.to_string())?;
    let base: Value = serde_json::from_str(&text).map_err(|e| e.to_string())?;
    let dir = tempfile::tempdir().map_err(|e| e.to_string())?;
    let start = Instant::now();
    println!("{}", path.display());
    println!("  factor   flagged/simulated   median implied scale   median failed tests (flagged)");
    let eval = |f: f64| -> Result<Tally, String> {
        let t = tally(&base, f, dir.path())?;
        println!(
            "  {:>8.3}   {:>2}/{:<2}              {:>10}             {}",
            t.factor,
            t.flagged,
            t.evaluated,
            t.median_scale
                .map_or_else(|| "n/a".to_string(), |s| format!("{s:.3}")),
            t.median_failures
        );
        Ok(t)
    };
    let mut below = 0.0f64;
    let mut above = None;
    for f in ladder() {
        let t = eval(f)?;
        if t.flagged >= AT_LEAST {
            above = Some(f);
            break;
        }
        below = f;
    }
    let Some(mut hi) = above else {
        println!(
            "  not flagged in {AT_LEAST} of {SEEDS} seeds at any factor up to {LARGEST} ({:.0} s)",
            start.elapsed().as_secs_f64()
        );
        return Ok(());
    };
    if below > 0.0 {
        let mut lo = below;
        for _ in 0..REFINE_STEPS {
            let mid = (lo * hi).sqrt();
            if eval(mid)?.flagged >= AT_LEAST {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        println!(
            "  sensitivity: flagged in >= {AT_LEAST}/{SEEDS} seeds from f = {hi:.3} \
             (not at {lo:.3}); {:.0} s",
            start.elapsed().as_secs_f64()
        );
    } else {
        println!(
            "  sensitivity: flagged in >= {AT_LEAST}/{SEEDS} seeds already at f = {hi} \
             (the honest run itself); {:.0} s",
            start.elapsed().as_secs_f64()
        );
    }
    Ok(())
}

/// 1, 2, 5, 10, 20, 50, … up to [`LARGEST`].
fn ladder() -> impl Iterator<Item = f64> {
    (0..)
        .flat_map(|decade| [1.0, 2.0, 5.0].map(|m| m * 10f64.powi(decade)))
        .take_while(|&f| f <= LARGEST)
}

fn tally(base: &Value, factor: f64, dir: &Path) -> Result<Tally, String> {
    let mut v = base.clone();
    v["true_noise"] = json!({ "scale": factor });
    let s = parse_scenario(&v.to_string()).map_err(|p| format!("scenario refused: {p:?}"))?;
    let noise = to_json_string(&s.noise);
    let (run_path, noise_path) = (dir.join("run.h5"), dir.join("noise.json"));
    let mut flagged = 0;
    let mut scales = Vec::new();
    let mut failures = Vec::new();
    let mut evaluated = 0;
    for seed in 1..=SEEDS {
        // The decision is made once 19 seeds are flagged or 2 are not: stop there.
        if flagged >= AT_LEAST || evaluated - flagged > SEEDS as usize - AT_LEAST {
            break;
        }
        evaluated += 1;
        let sim = simulate(&s, seed);
        write_run(&run_path, &sim.run, &WriteOptions::default()).map_err(|e| e.to_string())?;
        std::fs::write(&noise_path, &noise).map_err(|e| e.to_string())?;
        let checks: ChecksReport = compute_body(
            &run_path,
            &noise_path,
            "run.h5".into(),
            "noise.json".into(),
            &CertifyOptions::default(),
        )
        .map_err(|e| e.to_string())?
        .checks;
        if !checks.consistent() {
            flagged += 1;
            failures.push(checks.failures().len());
        }
        if let Some(x) = checks
            .observables
            .iter()
            .filter_map(|o| o.implied_scale.value)
            .reduce(f64::max)
        {
            scales.push(x);
        }
    }
    scales.sort_by(f64::total_cmp);
    failures.sort_unstable();
    Ok(Tally {
        factor,
        flagged,
        evaluated,
        median_scale: scales.get(scales.len() / 2).copied(),
        median_failures: failures.get(failures.len() / 2).copied().unwrap_or(0),
    })
}
