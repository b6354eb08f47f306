//! Writer for `truth.h5`: what the simulator knows exactly and a real run never does.
//!
//! Layout `quassay-truth` version 1 (docs/simulator.md):
//!
//! * root attributes `format` = `quassay-truth`, `format_version` = 1, `run_id`, `seed`
//!   (unsigned 64-bit), `redrawn`, `time_unit`, `n_sites`, `realizations`, `shots`;
//! * `/times` (T);
//! * `/observables/<name>/exact` (R × T): the exact noisy expectation per realization (for
//!   noise redrawn every shot: the mean of the exact values of that realization's shots) and
//!   `/observables/<name>/ideal` (T): the exact noiseless expectation;
//! * `/noise`: datasets `amplitude` (I, the true amplitudes in rad per time unit, not
//!   multiplied by the half spread), `mean_offset` (I), `source` (I, index of the source in
//!   the true record), `support` (I × 2, padded with −1), `draws` (rows × I: the drawn `g`;
//!   one row per realization, one row for `once`, or one per shot, realization-major, for
//!   `every_shot`); attribute `draw_rows` (`realization`, `once` or `shot`), attribute
//!   `sources_json` (the true sources, with their operators, as JSON); if there were too many
//!   per-shot draws to store, `draws` is absent and attribute `draws_omitted` says why;
//! * only if the scenario has a preparation error: root attribute `flip_probability` (q) and
//!   group `/preparation` with the same attribute and datasets `realization` (int64, rows),
//!   `flipped` (uint8, rows × n: 1 where the site was flipped) and `shots` (uint64, rows): the
//!   distinct flip patterns of every realization with their shot counts (one row per shot
//!   when the noise is redrawn every shot); if `rows × n` exceeds the stored-draw limit, the
//!   datasets are absent and attribute `patterns_omitted` says why.
//!
//! Object modification times are not recorded, so the same simulation gives the same bytes.

use std::path::Path;
use std::str::FromStr;

use hdf5::types::VarLenUnicode;
use hdf5::{Group, H5Type, Location};
use ndarray::{Array1, Array2};

use crate::error::{Error, Result};
use crate::model::Redrawn;
use crate::simulate::run::{Truth, MAX_STORED_SHOT_DRAWS};

/// What the truth file records about the run besides [`Truth`].
#[derive(Debug, Clone, Copy)]
pub struct TruthContext<'a> {
    pub run_id: &'a str,
    pub time_unit: &'a str,
    pub n_sites: usize,
    pub shots: u64,
    pub times: &'a [f64],
    /// JSON text of the true sources with their operators.
    pub sources_json: &'a str,
}

/// Writes `truth` to `path` (created or truncated; the caller makes it atomic).
pub fn write_truth(path: &Path, truth: &Truth, ctx: &TruthContext) -> Result<()> {
    hdf5::silence_errors(true);
    let err = |item: &str, e: hdf5::Error| Error::Write {
        path: path.to_path_buf(),
        message: format!("cannot write {item}: {e}"),
    };
    // No file lock, as in `outputs::run_file`: a fresh temporary file only this call writes.
    let file = hdf5::FileBuilder::new()
        .with_fcpl(|p| p.obj_track_times(false))
        .with_fapl(|p| p.file_locking(false))
        .create(path)
        .map_err(|e| err("the file", e))?;
    let w = W { err: &err };
    w.str_attr(&file, "format", "quassay-truth")?;
    w.scalar_attr(&file, "format_version", 1i64)?;
    w.str_attr(&file, "run_id", ctx.run_id)?;
    w.scalar_attr(&file, "seed", truth.seed)?;
    w.str_attr(&file, "redrawn", truth.redrawn.as_str())?;
    w.str_attr(&file, "time_unit", ctx.time_unit)?;
    w.scalar_attr(&file, "n_sites", ctx.n_sites as i64)?;
    let r = truth.observables.first().map_or(0, |o| o.exact.nrows());
    w.scalar_attr(&file, "realizations", r as i64)?;
    w.scalar_attr(&file, "shots", ctx.shots)?;
    w.dataset(&file, "times", &Array1::from(ctx.times.to_vec()))?;
    let obs = w.group(&file, "observables")?;
    for o in &truth.observables {
        let g = w.group(&obs, &o.name)?;
        w.dataset(&g, "exact", &o.exact)?;
        w.dataset(&g, "ideal", &Array1::from(o.ideal.clone()))?;
    }
    let noise = w.group(&file, "noise")?;
    let inst = &truth.instances;
    w.dataset(
        &noise,
        "amplitude",
        &Array1::from_iter(inst.iter().map(|i| i.amplitude)),
    )?;
    w.dataset(
        &noise,
        "mean_offset",
        &Array1::from_iter(inst.iter().map(|i| i.mean_offset)),
    )?;
    w.dataset(
        &noise,
        "source",
        &Array1::from_iter(inst.iter().map(|i| i.source as i64)),
    )?;
    let mut support = Array2::<i64>::from_elem((inst.len(), 2), -1);
    for (k, i) in inst.iter().enumerate() {
        for (j, &s) in i.support.iter().take(2).enumerate() {
            support[[k, j]] = s as i64;
        }
    }
    w.dataset(&noise, "support", &support)?;
    let rows = match truth.redrawn {
        Redrawn::EveryRealization => "realization",
        Redrawn::Once => "once",
        Redrawn::EveryShot => "shot",
    };
    w.str_attr(&noise, "draw_rows", rows)?;
    w.str_attr(&noise, "sources_json", ctx.sources_json)?;
    match &truth.draws {
        Some(d) => w.dataset(&noise, "draws", d)?,
        None => w.str_attr(
            &noise,
            "draws_omitted",
            &format!(
                "more than {MAX_STORED_SHOT_DRAWS} per-shot draws; rerun with fewer shots to keep them"
            ),
        )?,
    }
    if let Some(p) = &truth.preparation {
        w.scalar_attr(&file, "flip_probability", p.flip_probability)?;
        let g = w.group(&file, "preparation")?;
        w.scalar_attr(&g, "flip_probability", p.flip_probability)?;
        match &p.patterns {
            Some(rows) => {
                let realization = Array1::from_iter(rows.iter().map(|r| r.realization as i64));
                let shots = Array1::from_iter(rows.iter().map(|r| r.shots));
                let mut flipped = Array2::<u8>::zeros((rows.len(), ctx.n_sites));
                for (k, r) in rows.iter().enumerate() {
                    for i in 0..ctx.n_sites {
                        flipped[[k, i]] = (r.mask >> i & 1) as u8;
                    }
                }
                w.dataset(&g, "realization", &realization)?;
                w.dataset(&g, "flipped", &flipped)?;
                w.dataset(&g, "shots", &shots)?;
            }
            None => w.str_attr(
                &g,
                "patterns_omitted",
                &format!(
                    "more than {MAX_STORED_SHOT_DRAWS} pattern entries (rows × sites); rerun with fewer shots or realizations to keep them"
                ),
            )?,
        }
    }
    drop(file);
    Ok(())
}

struct W<'a> {
    err: &'a dyn Fn(&str, hdf5::Error) -> Error,
}

impl W<'_> {
    fn group(&self, parent: &Group, name: &str) -> Result<Group> {
        parent
            .create_group_builder()
            .obj_track_times(false)
            .create(name)
            .map_err(|e| (self.err)(name, e))
    }

    fn str_attr(&self, loc: &Location, name: &str, value: &str) -> Result<()> {
        let v = VarLenUnicode::from_str(value).map_err(|e| Error::Write {
            path: Path::new(name).to_path_buf(),
            message: format!("attribute {name}: {e}"),
        })?;
        loc.new_attr::<VarLenUnicode>()
            .shape(())
            .create(name)
            .and_then(|a| a.as_writer().write_scalar(&v))
            .map_err(|e| (self.err)(name, e))
    }

    fn scalar_attr<T: H5Type>(&self, loc: &Location, name: &str, value: T) -> Result<()> {
        loc.new_attr::<T>()
            .shape(())
            .create(name)
            .and_then(|a| a.as_writer().write_scalar(&value))
            .map_err(|e| (self.err)(name, e))
    }

    fn dataset<T: H5Type, D: ndarray::Dimension>(
        &self,
        g: &Group,
        name: &str,
        data: &ndarray::Array<T, D>,
    ) -> Result<()> {
        g.new_dataset_builder()
            .with_data(data)
            .obj_track_times(false)
            .create(name)
            .map(|_| ())
            .map_err(|e| (self.err)(name, e))
    }
}
