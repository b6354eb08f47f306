//! From archived inputs to a certificate body: read, expand, bound, record, build.
//!
//! `certify` and `verify` both go through [`compute_body`], so a certificate reproduces exactly
//! when the inputs, the options and the tool version are the same.
//!
//! Speed and memory (the run file dominates both): the run is read one observable at a time,
//! straight into the storage of the kept array (no block copies); it is checked and summed for
//! the bounds row block by row block (about 1 MiB each), then checked against the record, and
//! then sent whole to a hashing thread for its content digest, which hashes it while the next
//! observable is read and hands the storage back. The bounds and consistency checks of an
//! observable run on a thread of their own while the next one is read, and a fourth thread
//! hashes the file's bytes (from a memory mapping). Nothing of size R × T × K is held: at
//! most five observables' R × T values (every queue holds one). The numbers do not depend on the
//! threads: each digest sees its bytes in row-major order, every sum is taken in realization
//! order on one thread, and the observables are bounded and checked in reading order.

use std::collections::HashMap;
use std::path::Path;
use std::sync::mpsc::{sync_channel, Receiver, SyncSender};

use serde_json::Value;

use super::body::{build_body, CertifyOptions, RecordedInputs};
use super::hash::{encode_f64, encode_i64, ContentHasher, ContentKind};
use super::record::{header_digests, small_digests, streamed_paths, DatasetDigest, FileRecord};
use crate::bounds::data_statement;
use crate::bounds::global::SourceData;
use crate::bounds::run_bounds::{ObservableBounds, RunBounds, RunEvaluator, RunGeometry};
use crate::checks::report::{CheckPlan, ChecksReport, ObservableChecks};
use crate::error::{Error, InputKind, Result};
use crate::inputs::noise_record::read_noise_record;
use crate::inputs::run_file::{
    open_run, recycle_storage, ContentSink, NoContent, ObservableRead, RunOutline,
};
use crate::model::{NoiseModel, NoiseRecord, Redrawn};

pub use super::body::Loaded;

/// Reads and checks the run and the noise record, and expands the record against the run.
pub fn load_inputs(run_path: &Path, noise_path: &Path) -> Result<Loaded> {
    let stream = open_run(run_path)?;
    let noise = read_noise_record(noise_path);
    let names = stream.observable_names().to_vec();
    let run = stream.read_observables(&mut NoContent, |_| {})?;
    let record = noise?;
    let model = expand(&record, &run, &names, run_path, noise_path)?;
    Ok(Loaded { run, record, model })
}

fn expand(
    record: &NoiseRecord,
    run: &RunOutline,
    observable_names: &[String],
    run_path: &Path,
    noise_path: &Path,
) -> Result<NoiseModel> {
    record
        .expand(&run.lattice, run.time_unit)
        .and_then(|model| {
            let problems = record.device.unknown_readout_names(observable_names);
            if problems.is_empty() {
                Ok(model)
            } else {
                Err(problems)
            }
        })
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
        })
}

/// A computed body with what produced it.
#[derive(Debug, Clone)]
pub struct Computed {
    pub loaded: Loaded,
    pub bounds: RunBounds,
    /// The consistency checks of the data against the record (docs/checks.md).
    pub checks: ChecksReport,
    pub body: Value,
}

/// Computes the body from the inputs at `run_path` and `noise_path`, recorded under the names
/// `recorded_run` and `recorded_noise` (paths relative to the certificate).
///
/// Errors, in this order of precedence: problems of the run file, of the noise record, of
/// the record against the run, of the options, then unreadable files.
pub fn compute_body(
    run_path: &Path,
    noise_path: &Path,
    recorded_run: String,
    recorded_noise: String,
    options: &CertifyOptions,
) -> Result<Computed> {
    std::thread::scope(|scope| {
        let file_hash = scope.spawn(|| FileRecord::of(run_path, recorded_run));
        let (tx, rx) = sync_channel::<Message>(IN_FLIGHT);
        let (recycle_tx, recycle_rx) = sync_channel::<Vec<u8>>(IN_FLIGHT + 2);
        let (kept_back_tx, kept_back_rx) = sync_channel::<Vec<f64>>(KEPT_BACK);
        let hasher = scope.spawn(move || hash_blocks(rx, recycle_tx, kept_back_tx));
        let kept = KeptSender {
            tx: tx.clone(),
            back: kept_back_rx,
        };
        let mut sink = ThreadedSink {
            tx,
            recycle: recycle_rx,
            buf: Vec::new(),
        };
        let streamed = stream_run(run_path, noise_path, options, &mut sink, kept);
        drop(sink);
        let content = hasher.join().unwrap_or_default();
        let file = file_hash.join();
        let (loaded, bounds, checks, small) = streamed?;
        let run_record = match file {
            Ok(r) => r?,
            Err(panic) => std::panic::resume_unwind(panic),
        };
        let datasets = assemble_digests(&loaded.run, content, small)?;
        let inputs = RecordedInputs {
            run: run_record,
            datasets,
            noise_record: FileRecord::of(noise_path, recorded_noise)?,
        };
        let body = build_body(
            &loaded,
            &bounds,
            &inputs,
            options,
            checks.to_json(),
            checks.verdict_json(),
        );
        Ok(Computed {
            loaded,
            bounds,
            checks,
            body,
        })
    })
}

/// The data share in force: the one asked for, or 0 when no data statement could narrow the
/// interval for runs of this shape (one realization without declared two-outcome
/// observables, say; docs/method.md §6). Fixed by the run's shape, its declarations, the redraw
/// mode and the options, before any value is read.
fn effective_share(
    stream: &crate::inputs::run_file::RunStream,
    options: &CertifyOptions,
    header: Option<&RunOutline>,
    n_observables: usize,
    redrawn: Option<Redrawn>,
) -> f64 {
    let (Some(r), Some(h)) = (stream.first_realizations(), header) else {
        return options.data_share;
    };
    let Ok(s) = data_statement::shares(options.confidence, options.data_share) else {
        return options.data_share;
    };
    let points = h.times.len() * n_observables;
    let alpha = data_statement::alpha_per_point(s.data_epsilon, points, options.simultaneity);
    let method = data_statement::method_for(r, h.times.len(), n_observables);
    // The exact binomial interval of pooled shots is narrower than the range for any count.
    let binomial = redrawn.is_some_and(|m| data_statement::shots_pool(m, r))
        && alpha > 0.0
        && stream.any_two_outcomes();
    if binomial || data_statement::can_narrow(r, alpha, method) {
        options.data_share
    } else {
        0.0
    }
}

/// What the data statement needs on the checking thread.
#[derive(Debug, Clone, Copy)]
struct DataPlan {
    alpha_point: f64,
}

/// The small digests of each observable (`ideal`, terms), in observable order.
type SmallDigests = Vec<Vec<DatasetDigest>>;

/// Reads the run once: layout checks, bounds, consistency checks and (through `sink`) the
/// content of every R × T dataset. One observable is held whole at a time (the consistency
/// checks need the spread of its realizations), then dropped.
fn stream_run(
    run_path: &Path,
    noise_path: &Path,
    options: &CertifyOptions,
    sink: &mut dyn ContentSink,
    kept: KeptSender,
) -> Result<(Loaded, RunBounds, ChecksReport, SmallDigests)> {
    let stream = open_run(run_path)?;
    let noise = read_noise_record(noise_path);
    let header = stream.outline().cloned();
    let n_observables = stream.n_observables();
    // What can be prepared before the observables are read; a failure here is reported only
    // after the run's own problems.
    let model = match (&header, &noise) {
        (Some(h), Ok(record)) => Some(expand(
            record,
            h,
            stream.observable_names(),
            run_path,
            noise_path,
        )),
        _ => None,
    };
    // The data statement takes its share of ε before any value is read; the model statement
    // is evaluated at the rest, the fidelity statement at the whole ε (docs/method.md §6).
    let redrawn_mode = match &model {
        Some(Ok(m)) => Some(m.redrawn),
        _ => None,
    };
    let share = effective_share(
        &stream,
        options,
        header.as_ref(),
        n_observables,
        redrawn_mode,
    );
    let shares = data_statement::shares(options.confidence, share);
    let evaluator = match (&header, &model, &shares) {
        (_, _, Err(e)) => Some(Err(Error::Options(e.to_string()))),
        (Some(h), Some(Ok(model)), Ok(shares)) => Some(
            RunEvaluator::new(
                &h.times,
                model,
                RunGeometry {
                    lattice: &h.lattice,
                    hamiltonian: &h.hamiltonian,
                    time_unit: h.time_unit,
                },
                n_observables,
                shares.model_confidence,
                options.simultaneity,
            )
            .map(|mut ev| {
                ev.set_fidelity_epsilon(shares.epsilon);
                ev
            })
            .map_err(|e| Error::Options(e.to_string())),
        ),
        _ => None,
    };
    let ev = match evaluator {
        Some(Ok(ev)) => Some(ev),
        Some(Err(e)) => {
            // Still read the run: its problems take precedence.
            stream.read_observables(&mut NoContent, |_| {})?;
            return Err(e);
        }
        None => None,
    };
    let n_with_ideal = stream.n_with_ideal();
    let sources: Vec<SourceData> = match &model {
        Some(Ok(m)) => m.instances.iter().map(SourceData::from_instance).collect(),
        _ => Vec::new(),
    };
    let times: Vec<f64> = header.as_ref().map_or_else(Vec::new, |h| h.times.clone());
    let redrawn = match &model {
        Some(Ok(m)) => Some(m.redrawn),
        _ => None,
    };
    // The observables are checked on a thread of their own, in the order they are read,
    // while this one reads the next: reading (HDF5, one thread) and checking then overlap.
    let KeptSender { tx: kept_tx, back } = kept;
    // One observable may wait between the reader and the checking thread, so at most five
    // observables' values are alive (being read, waiting, being checked, queued for hashing,
    // being hashed) besides one recycled storage.
    let (to_checks, observables_read) = sync_channel::<ObservableRead>(1);
    let (times, sources) = (&times, &sources);
    // The data statement's failure probability per point, when it has a share.
    let data = match shares {
        Ok(s) if s.data_epsilon > 0.0 => Some(DataPlan {
            alpha_point: data_statement::alpha_per_point(
                s.data_epsilon,
                times.len() * n_observables,
                options.simultaneity,
            ),
        }),
        _ => None,
    };
    let check_all = move || {
        let mut ev = ev;
        let kept = KeptTx(kept_tx);
        let mut plan: Option<CheckPlan> = None;
        let mut checked: Vec<ObservableChecks> = Vec::with_capacity(n_observables);
        let mut observables: Vec<ObservableBounds> = Vec::with_capacity(n_observables);
        let mut small = Vec::with_capacity(n_observables);
        for o in observables_read {
            if let (Some(ev), Some(redrawn), Some(whole)) = (ev.as_mut(), redrawn, o.kept.as_ref())
            {
                let outline = &o.outline;
                let mut b = ev.observable(
                    &outline.name,
                    outline.spread(),
                    &outline.support,
                    outline.terms.as_ref(),
                    &o.sums,
                );
                if let Some(d) = data {
                    b.attach_data(
                        whole.values.view(),
                        [outline.spectrum_min, outline.spectrum_max],
                        redrawn,
                        d.alpha_point,
                        data_statement::method_for(
                            whole.values.nrows(),
                            times.len(),
                            n_observables,
                        ),
                        whole.two_outcomes.then_some(&whole.shots),
                    );
                }
                let plan = plan.get_or_insert_with(|| {
                    CheckPlan::new(
                        times,
                        sources,
                        redrawn,
                        whole.values.nrows(),
                        n_observables,
                        n_with_ideal,
                        options.check_level,
                    )
                });
                // V_noise: the smaller of the global (e_i = s_O t) and the light-cone
                // (e_i = s_O T_i(t)) Efron–Stein sums, at every time where both exist,
                // whichever statement the interval used: both are upper bounds on the same
                // variance, fixed by the record before the data are seen, so their minimum
                // is one too and the test keeps its level (docs/method.md §5). Only T numbers
                // per observable, never the per-source sensitivities.
                let local_v = b.local_v_noise();
                checked.push(plan.observable_with_variance(
                    whole,
                    &b.mean,
                    &b.points,
                    None,
                    local_v.as_deref(),
                    b.device.as_ref().map(|d| d.total.as_slice()),
                ));
                observables.push(b);
            }
            small.push(small_digests(&o.outline));
            if let Some(whole) = o.kept {
                // The kept float datasets go to the hashing thread now (the sink took none
                // of their blocks), which hashes them while the next observable is read and
                // hands their storage back to the reader for a later one.
                let at = format!("/observables/{}", whole.name);
                kept.send(format!("{at}/values"), whole.values);
                if let Some(stderr) = whole.stderr {
                    kept.send(format!("{at}/stderr"), stderr);
                }
            }
        }
        (ev, plan, checked, observables, small)
    };
    let (run, (ev, plan, checked, observables, small)) = std::thread::scope(|scope| {
        let checker = scope.spawn(check_all);
        let run = stream.read_observables_whole(sink, |o| {
            recycle_from(&back);
            // A closed channel means the checking thread has gone (a panic, resumed below).
            let _ = to_checks.send(o);
        });
        drop(to_checks);
        match checker.join() {
            Ok(out) => (run, out),
            Err(panic) => std::panic::resume_unwind(panic),
        }
    });
    let run = run?;
    let bounds = ev.map(|ev| ev.finish(observables));
    let checks = plan.map(|p| p.finish(checked));
    let record = noise?;
    let model = match model {
        Some(m) => m?,
        None => {
            let names: Vec<String> = run.observables.iter().map(|o| o.name.clone()).collect();
            expand(&record, &run, &names, run_path, noise_path)?
        }
    };
    let (Some(bounds), Some(mut checks)) = (bounds, checks) else {
        return Err(Error::Options(
            "the bounds could not be prepared; please report this as a bug in quassay".into(),
        ));
    };
    checks.declares_preparation_or_readout =
        model.device.preparation.is_some() || model.device.readout.is_some();
    Ok((Loaded { run, record, model }, bounds, checks, small))
}

/// The digests in the documented order (see [`super::record::dataset_digests`]): the run's
/// small datasets, then per observable the streamed R × T ones and its small ones.
fn assemble_digests(
    run: &RunOutline,
    content: Vec<DatasetDigest>,
    small: SmallDigests,
) -> Result<Vec<DatasetDigest>> {
    let mut by_path: HashMap<String, DatasetDigest> =
        content.into_iter().map(|d| (d.path.clone(), d)).collect();
    let mut out = header_digests(run);
    for (o, small) in run.observables.iter().zip(small) {
        for path in streamed_paths(o) {
            let d = by_path.remove(&path).ok_or_else(|| {
                Error::Options(format!(
                    "the content digest of {path} is missing; please report this as a bug in quassay"
                ))
            })?;
            out.push(d);
        }
        out.extend(small);
    }
    Ok(out)
}

/// Messages waiting for the hashing thread: encoded blocks of about [`SEND_BYTES`], or whole
/// kept datasets (R × T values each). One: the pipeline runs at the pace of its slowest stage
/// whatever the queues, and each place in this one can hold an observable's values.
const IN_FLIGHT: usize = 1;
/// Bytes per message to the hashing thread: 1 MiB.
const SEND_BYTES: usize = 1 << 20;

/// Hashed kept arrays whose storage waits to be taken back by the reader.
const KEPT_BACK: usize = 1;

enum Message {
    Begin {
        path: String,
        kind: ContentKind,
        shape: Vec<usize>,
    },
    Data(Vec<u8>),
    Floats(Vec<f64>),
    /// A whole kept float dataset, in one message (it may come between the messages of a
    /// streamed dataset: another thread sends it); its storage is handed back once hashed.
    Kept {
        path: String,
        shape: Vec<usize>,
        values: Vec<f64>,
    },
    End,
}

/// Sends the float datasets kept whole to the hashing thread (see
/// [`ContentSink::takes_kept_floats`]); `back` receives the storage it is done with.
struct KeptSender {
    tx: SyncSender<Message>,
    back: Receiver<Vec<f64>>,
}

/// The sending half of a [`KeptSender`], for the thread that checks the observables.
struct KeptTx(SyncSender<Message>);

impl KeptTx {
    /// The whole dataset at `path`, as one message.
    fn send(&self, path: String, values: ndarray::Array2<f64>) {
        let shape = values.shape().to_vec();
        let values = if values.is_standard_layout() {
            values.into_raw_vec_and_offset().0
        } else {
            values.iter().copied().collect()
        };
        // A closed channel means the hashing thread has gone; its result says so.
        let _ = self.0.send(Message::Kept {
            path,
            shape,
            values,
        });
    }
}

/// Storage the hashing thread has finished with, for the next observable read on this thread.
fn recycle_from(back: &Receiver<Vec<f64>>) {
    while let Ok(v) = back.try_recv() {
        recycle_storage(v);
    }
}

/// Sends the content, encoded as the digest's byte stream, to the hashing thread.
struct ThreadedSink {
    tx: SyncSender<Message>,
    recycle: Receiver<Vec<u8>>,
    buf: Vec<u8>,
}

impl ThreadedSink {
    fn send(&mut self, m: Message) {
        // A closed channel means the hashing thread has gone; its result says so.
        let _ = self.tx.send(m);
    }

    fn flush(&mut self) {
        if !self.buf.is_empty() {
            let next = self.recycle.try_recv().unwrap_or_default();
            let full = std::mem::replace(&mut self.buf, next);
            self.send(Message::Data(full));
            self.buf.clear();
        }
    }
}

impl ContentSink for ThreadedSink {
    fn begin(&mut self, path: &str, kind: ContentKind, shape: &[usize]) {
        self.send(Message::Begin {
            path: path.to_string(),
            kind,
            shape: shape.to_vec(),
        });
    }
    fn floats(&mut self, values: &[f64]) {
        for chunk in values.chunks(SEND_BYTES / 8) {
            encode_f64(chunk, &mut self.buf);
            if self.buf.len() >= SEND_BYTES {
                self.flush();
            }
        }
    }
    fn floats_owned(&mut self, values: Vec<f64>) {
        self.flush();
        self.send(Message::Floats(values));
    }
    fn ints(&mut self, values: &[i64]) {
        for chunk in values.chunks(SEND_BYTES / 8) {
            encode_i64(chunk, &mut self.buf);
            if self.buf.len() >= SEND_BYTES {
                self.flush();
            }
        }
    }
    fn end(&mut self) {
        self.flush();
        self.send(Message::End);
    }
    fn takes_kept_floats(&self) -> bool {
        true
    }
}

/// The hashing thread: digests each dataset's bytes in the order they arrive.
fn hash_blocks(
    rx: Receiver<Message>,
    recycle: SyncSender<Vec<u8>>,
    kept_back: SyncSender<Vec<f64>>,
) -> Vec<DatasetDigest> {
    let mut out = Vec::new();
    let mut current: Option<(String, ContentKind, Vec<usize>, ContentHasher)> = None;
    for m in rx {
        match m {
            Message::Begin { path, kind, shape } => {
                let h = ContentHasher::new(kind, &shape);
                current = Some((path, kind, shape, h));
            }
            Message::Data(mut bytes) => {
                if let Some((_, _, _, h)) = current.as_mut() {
                    h.push_encoded_bytes(&bytes);
                }
                bytes.clear();
                let _ = recycle.try_send(bytes);
            }
            Message::Floats(values) => {
                if let Some((_, _, _, h)) = current.as_mut() {
                    h.push_f64(&values);
                }
            }
            Message::Kept {
                path,
                shape,
                values,
            } => {
                let mut h = ContentHasher::new(ContentKind::F64, &shape);
                h.push_f64(&values);
                out.push(DatasetDigest {
                    path,
                    kind: ContentKind::F64,
                    shape,
                    sha256: h.finish(),
                });
                // Full: the reader has storage enough; this one is dropped.
                let _ = kept_back.try_send(values);
            }
            Message::End => {
                if let Some((path, kind, shape, h)) = current.take() {
                    out.push(DatasetDigest {
                        path,
                        kind,
                        shape,
                        sha256: h.finish(),
                    });
                }
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The threaded sink gives the digests of the in-thread one, for content spanning several
    /// messages (3 MiB of floats) and for integers.
    #[test]
    fn the_hashing_thread_digests_like_the_calling_thread() {
        let floats: Vec<f64> = (0..400_000).map(|i| (i as f64 * 0.37).cos()).collect();
        let ints: Vec<i64> = (0..1000).map(|i| i * i - 77).collect();
        let feed = |sink: &mut dyn ContentSink| {
            sink.begin("/a", ContentKind::F64, &[400, 1000]);
            sink.floats(&floats[..1234]);
            sink.floats_owned(floats[1234..300_000].to_vec());
            sink.floats(&floats[300_000..]);
            sink.end();
            sink.begin("/b", ContentKind::I64, &[1000]);
            sink.ints(&ints);
            sink.end();
        };
        let mut plain = super::super::record::DigestSink::default();
        feed(&mut plain);
        plain.begin("/c", ContentKind::F64, &[400, 1000]);
        plain.floats(&floats);
        plain.end();
        plain.begin("/d", ContentKind::F64, &[1000]);
        plain.floats(&floats[..1000]);
        plain.end();
        let (tx, rx) = sync_channel(IN_FLIGHT);
        let (rtx, rrx) = sync_channel(IN_FLIGHT + 2);
        let (ktx, krx) = sync_channel(KEPT_BACK);
        let (threaded, back) = std::thread::scope(|s| {
            let h = s.spawn(move || hash_blocks(rx, rtx, ktx));
            let kept = KeptTx(tx.clone());
            let mut sink = ThreadedSink {
                tx,
                recycle: rrx,
                buf: Vec::new(),
            };
            assert!(sink.takes_kept_floats());
            feed(&mut sink);
            // A kept array goes whole, between the messages of a streamed dataset (as the
            // checking thread sends it), and its storage comes back.
            let whole = ndarray::Array2::from_shape_vec((400, 1000), floats.clone()).unwrap();
            sink.begin("/d", ContentKind::F64, &[1000]);
            sink.floats_owned(floats[..500].to_vec());
            kept.send("/c".into(), whole);
            sink.floats(&floats[500..1000]);
            sink.end();
            drop(sink);
            drop(kept);
            let digests = h.join().unwrap();
            (digests, krx.recv().unwrap())
        });
        assert_eq!(threaded, plain.digests);
        assert_eq!(threaded.len(), 4);
        assert_eq!(back, floats);
    }

    /// The streaming path (row blocks, threads, per-time sums, shared noise terms) gives the
    /// digests and bounds of the in-memory path (whole arrays, `dataset_digests`,
    /// `evaluate_run`), bit for bit, on the h5py fixture (float32 gzip+shuffle values, shots
    /// per point, standard errors, terms; written by h5py, not by quassay).
    #[test]
    fn streaming_reproduces_the_in_memory_digests_and_bounds() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference");
        let run_path = root.join("h5py/run_f32_gzip.h5");
        let noise_path = root.join("noise/valid/chain-detuning.json");
        // The model statement alone, as `evaluate_run` computes it.
        let options = CertifyOptions {
            data_share: 0.0,
            ..CertifyOptions::default()
        };
        let c = compute_body(&run_path, &noise_path, "r".into(), "n".into(), &options).unwrap();
        let run = crate::inputs::run_file::read_run(&run_path).unwrap();
        let expected = super::super::record::dataset_digests(&run);
        let got: Vec<Value> = c.body["inputs"]["run"]["datasets"]
            .as_array()
            .unwrap()
            .clone();
        let want: Vec<Value> = expected.iter().map(|d| d.to_json()).collect();
        assert_eq!(got, want);
        assert!(want.iter().any(|d| d["path"] == "/observables/Z_1/shots"));
        assert!(want
            .iter()
            .any(|d| d["path"] == "/observables/ZZ_mean/stderr"));
        let bounds = crate::bounds::run_bounds::evaluate_run(
            &run,
            &c.loaded.model,
            options.confidence,
            options.simultaneity,
        )
        .unwrap();
        assert_eq!(bounds, c.bounds);
        assert_eq!(c.loaded.run, RunOutline::of(&run));
    }
}
