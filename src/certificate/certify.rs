//! From archived inputs to a certificate body: read, expand, bound, record, build.
//!
//! `certify` and `verify` both go through [`compute_body`], so a certificate reproduces exactly
//! when the inputs, the options and the tool version are the same.

use std::path::Path;

use serde_json::{json, Value};

use super::body::{build_body, CertifyOptions, RecordedInputs};
use super::record::{dataset_digests, FileRecord};
use crate::bounds::run_bounds::{evaluate_run, RunBounds};
use crate::error::{Error, InputKind, Result};
use crate::inputs::noise_record::read_noise_record;
use crate::inputs::run_file::read_run;
use crate::model::{NoiseModel, NoiseRecord, Run};

/// Everything a certificate is computed from, read and checked.
#[derive(Debug, Clone)]
pub struct Loaded {
    pub run: Run,
    pub record: NoiseRecord,
    pub model: NoiseModel,
}

/// Reads and checks the run and the noise record, and expands the record against the run.
pub fn load_inputs(run_path: &Path, noise_path: &Path) -> Result<Loaded> {
    let run = read_run(run_path)?;
    let record = read_noise_record(noise_path)?;
    let model = record
        .expand(&run.lattice, run.time_unit)
        .map_err(|problems| Error::Input {
            kind: InputKind::NoiseRecord,
            file: noise_path.to_path_buf(),
            problems: problems
                .into_iter()
                .map(|mut p| {
                    p.message = format!("{} (against run '{}')", p.message, run_path.display());
                    p
                })
                .collect(),
        })?;
    Ok(Loaded { run, record, model })
}

/// A computed body with what produced it.
#[derive(Debug, Clone)]
pub struct Computed {
    pub loaded: Loaded,
    pub bounds: RunBounds,
    pub body: Value,
}

/// Computes the body from the inputs at `run_path` and `noise_path`, recorded under the names
/// `recorded_run` and `recorded_noise` (paths relative to the certificate).
pub fn compute_body(
    run_path: &Path,
    noise_path: &Path,
    recorded_run: String,
    recorded_noise: String,
    options: &CertifyOptions,
) -> Result<Computed> {
    let loaded = load_inputs(run_path, noise_path)?;
    let bounds = evaluate_run(
        &loaded.run,
        &loaded.model,
        options.confidence,
        options.simultaneity,
    )
    .map_err(|e| Error::Options(e.to_string()))?;
    let inputs = RecordedInputs {
        run: FileRecord::of(run_path, recorded_run)?,
        datasets: dataset_digests(&loaded.run),
        noise_record: FileRecord::of(noise_path, recorded_noise)?,
    };
    let checks = json!({
        "status": "not_performed",
        "reason": "this version of quassay does not yet test the data against the noise record (bounds.md section 6)",
    });
    let verdict = json!({
        "status": "not_tested",
        "text": "The bounds were computed; whether the data are consistent with the noise record was not tested.",
    });
    let body = build_body(&loaded, &bounds, &inputs, options, checks, verdict);
    Ok(Computed {
        loaded,
        bounds,
        body,
    })
}
