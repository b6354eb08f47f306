//! `quassay simulate`: exact simulation of a scenario into a run file and its noise record.
//!
//! Reads and checks the scenario (all problems at once), simulates, and writes `run.h5`,
//! `noise.json` and `truth.h5` into the output folder as one unit: all three appear, or none,
//! and existing files are kept unless `--force` is given.

use std::fmt::Write as _;

use super::args::SimulateArgs;
use super::{print_stdout, Outcome};
use crate::error::{Error, InputKind, Result};
use crate::inputs::scenario::{read_scenario, Scenario};
use crate::outputs::atomic::write_files;
use crate::outputs::noise_record::to_json_string;
use crate::outputs::run_file::{write_run, WriteOptions};
use crate::outputs::truth_file::{write_truth, TruthContext};
use crate::simulate::run::try_simulate;

/// The files written, in this order.
pub const OUTPUT_FILES: [&str; 3] = ["run.h5", "noise.json", "truth.h5"];

/// Runs `simulate`.
pub fn run(args: &SimulateArgs) -> Result<Outcome> {
    let scenario = read_scenario(&args.scenario)?;
    let seed = args.seed.unwrap_or(scenario.seed);
    let sim = try_simulate(&scenario, seed).map_err(|problem| Error::Input {
        kind: InputKind::Scenario,
        file: args.scenario.clone(),
        problems: vec![problem],
    })?;
    let noise_json = to_json_string(&scenario.noise);
    let sources_json = true_sources_json(&scenario)?;
    let written = write_files(&args.output, &OUTPUT_FILES, args.force, |tmp| {
        write_run(&tmp.join("run.h5"), &sim.run, &WriteOptions::default())?;
        std::fs::write(tmp.join("noise.json"), noise_json.as_bytes()).map_err(|e| {
            Error::Write {
                path: args.output.join("noise.json"),
                message: e.to_string(),
            }
        })?;
        let ctx = TruthContext {
            run_id: &scenario.run_id,
            time_unit: scenario.time_unit.as_str(),
            n_sites: scenario.lattice.n_sites(),
            shots: scenario.shots,
            times: &scenario.times,
            sources_json: &sources_json,
        };
        write_truth(&tmp.join("truth.h5"), &sim.truth, &ctx)
    })?;
    let mut out = String::new();
    let st = &sim.stats;
    let _ = writeln!(
        out,
        "simulated '{}': {} sites, {} times, {} observables, {} realizations × {} shots, \
         noise redrawn {}, seed {seed}",
        scenario.run_id,
        scenario.lattice.n_sites(),
        scenario.times.len(),
        scenario.observables.len(),
        scenario.realizations,
        scenario.shots,
        scenario.true_noise.redrawn.as_str(),
    );
    let _ = writeln!(
        out,
        "{} evolutions, {} products H·ψ, truncation bound ≤ {:.1e}, norm drift ≤ {:.1e}, {:.2} s",
        st.evolutions, st.products, st.max_truncation_bound, st.max_norm_drift, st.seconds
    );
    if st.generator_applications > 0 {
        let _ = writeln!(
            out,
            "device errors: {} realizations evolved as density matrices ({} applications of \
             the Lindblad generator), at the record's central values (docs/scenario.md)",
            scenario.realizations, st.generator_applications
        );
    }
    if let Some(p) = scenario.preparation_error {
        let what = if scenario.true_noise.redrawn == crate::model::Redrawn::EveryShot {
            "shots started with at least one flip"
        } else {
            "distinct flip patterns evolved (over all realizations)"
        };
        let _ = writeln!(
            out,
            "preparation error: every site flipped with probability {} per shot; {} {what}",
            p.flip_probability, st.flip_patterns
        );
    }
    for path in &written {
        let size = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
        let _ = writeln!(out, "wrote {} ({size} bytes)", path.display());
    }
    print_stdout(&out)?;
    Ok(Outcome::Success)
}

/// The true sources as JSON, each with its `operator`.
fn true_sources_json(s: &Scenario) -> Result<String> {
    let text = to_json_string(&s.true_noise);
    let mut v: serde_json::Value = serde_json::from_str(&text)
        .map_err(|e| Error::Options(format!("internal: the noise writer gave bad JSON: {e}")))?;
    if let Some(sources) = v.get_mut("sources").and_then(|x| x.as_array_mut()) {
        for (src, op) in sources.iter_mut().zip(&s.true_operators) {
            if let Some(o) = src.as_object_mut() {
                o.insert("operator".into(), serde_json::json!(op.as_str()));
            }
        }
    }
    Ok(v.to_string())
}
