//! Imports and fits run on a named background thread, so the window never freezes on a big
//! file. Requests go in over one channel, results come back over another, and each result
//! asks egui to repaint.

use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::mpsc::{Receiver, Sender, TryRecvError, channel};

use diffusor_fit::analysis::{ModelInputs, ModelKind, analyze_model};
use diffusor_fit::cell::Cell;
use diffusor_fit::planar::PlanarOptions;
use diffusor_trace::{ImportOptions, Progress, import_bytes};
use eframe::egui;
use sha2::{Digest, Sha256};

use crate::runs::{FitView, RunData, RunId};

/// Where the bytes of an import are.
pub enum Source {
    /// In memory (a bundled file), labelled with its name.
    Bytes(&'static [u8]),
    /// On disk.
    Path(PathBuf),
    /// Dropped onto the window: read from its path when there is one on disk, else through the
    /// handle the windowing layer gave.
    Dropped(egui::DroppedFileHandle),
}

impl std::fmt::Debug for Source {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Source::Bytes(b) => write!(f, "Bytes({} bytes)", b.len()),
            Source::Path(p) => write!(f, "Path({})", p.display()),
            Source::Dropped(d) => write!(f, "Dropped({})", d.path().display()),
        }
    }
}

/// Work for the background thread.
#[derive(Debug)]
pub enum Job {
    /// Read a file.
    Import {
        /// The run it is for.
        id: RunId,
        /// Its name in messages.
        name: String,
        /// Its bytes.
        source: Source,
        /// The importer's choices (columns picked by the user), default otherwise.
        options: Box<ImportOptions>,
    },
    /// Fit a run.
    Fit {
        /// The run.
        id: RunId,
        /// Which request this is; only the newest per run is worked on.
        generation: u64,
        /// The run's data.
        data: Arc<RunData>,
        /// The cell.
        cell: Cell,
        /// The options, window included (boxed: they are most of the job's size).
        options: Box<PlanarOptions>,
        /// The model asked for; `None` for the geometry's default.
        model: Option<ModelKind>,
        /// What the model needs besides the cell.
        inputs: Box<ModelInputs>,
    },
}

/// What the background thread sends back.
#[derive(Debug)]
pub enum Outcome {
    /// A file was read (or not).
    Imported {
        /// The run.
        id: RunId,
        /// Its data, or the message to show beside it.
        result: Result<Arc<RunData>, String>,
    },
    /// A fit finished (or failed).
    Fitted {
        /// The run.
        id: RunId,
        /// The request it answers.
        generation: u64,
        /// The fit with its plotted arrays, or the message to show beside the run.
        result: Result<Arc<FitView>, String>,
    },
}

/// The handle to the background thread.
#[derive(Debug)]
pub struct Worker {
    jobs: Sender<(u64, Job)>,
    outcomes: Receiver<Outcome>,
    /// Jobs sent before the latest cancel carry a smaller number and are skipped.
    epoch: Arc<AtomicU64>,
}

impl Worker {
    /// Starts the thread; each outcome calls `ctx.request_repaint()`.
    pub fn spawn(ctx: egui::Context) -> std::io::Result<Worker> {
        let (jobs, job_rx) = channel::<(u64, Job)>();
        let (out_tx, outcomes) = channel::<Outcome>();
        let epoch = Arc::new(AtomicU64::new(0));
        let seen = Arc::clone(&epoch);
        std::thread::Builder::new()
            .name("diffusor-worker".to_owned())
            .spawn(move || work(&job_rx, &out_tx, &ctx, &seen))?;
        Ok(Worker {
            jobs,
            outcomes,
            epoch,
        })
    }

    /// Hands a job to the thread. `false` when the thread has gone.
    pub fn send(&self, job: Job) -> bool {
        self.jobs
            .send((self.epoch.load(Ordering::Acquire), job))
            .is_ok()
    }

    /// Drops every job not yet started. A fit already running finishes (it cannot be
    /// interrupted) and its outcome is for the caller to ignore; an import running stops at
    /// its next block when the caller cancels its `Progress` too, as `App::cancel_work` does.
    pub fn cancel(&self) {
        self.epoch.fetch_add(1, Ordering::AcqRel);
    }

    /// The outcomes that have arrived.
    pub fn received(&self) -> Vec<Outcome> {
        let mut out = Vec::new();
        loop {
            match self.outcomes.try_recv() {
                Ok(o) => out.push(o),
                Err(TryRecvError::Empty | TryRecvError::Disconnected) => return out,
            }
        }
    }
}

fn work(
    jobs: &Receiver<(u64, Job)>,
    outcomes: &Sender<Outcome>,
    ctx: &egui::Context,
    epoch: &AtomicU64,
) {
    while let Ok(first) = jobs.recv() {
        // Everything queued meanwhile is looked at together, so that a fit already superseded
        // by a newer request for the same run (typing in a field sends one per key) is skipped.
        let mut tagged = vec![first];
        while let Ok(j) = jobs.try_recv() {
            tagged.push(j);
        }
        let now = epoch.load(Ordering::Acquire);
        let batch: Vec<Job> = tagged
            .into_iter()
            .filter(|(e, _)| *e >= now)
            .map(|(_, j)| j)
            .collect();
        let newest = |id: RunId| {
            batch
                .iter()
                .filter_map(|j| match j {
                    Job::Fit {
                        id: i, generation, ..
                    } if *i == id => Some(*generation),
                    _ => None,
                })
                .max()
        };
        let keep: Vec<bool> = batch
            .iter()
            .map(|j| match j {
                Job::Fit { id, generation, .. } => newest(*id) == Some(*generation),
                Job::Import { .. } => true,
            })
            .collect();
        for (job, keep) in batch.into_iter().zip(keep) {
            // A cancel while this batch runs drops the rest of it.
            if !keep || epoch.load(Ordering::Acquire) != now {
                continue;
            }
            let outcome = run_job(job);
            if outcomes.send(outcome).is_err() {
                return;
            }
            ctx.request_repaint();
        }
    }
}

/// Bytes read for an import: the label for messages, the bytes, and their SHA-256 when it was
/// computed on the way in.
type Read = (String, std::borrow::Cow<'static, [u8]>, Option<String>);

/// A file's bytes, labelled as the importer labels a path (its messages end with it), read in
/// blocks of 4 MiB and hashed as they come, so that `progress` shows the reading (hashing a
/// large file takes as long as reading it) and a cancel stops it between two blocks.
fn read_file(path: &std::path::Path, progress: Option<&Progress>) -> Result<Read, String> {
    use std::io::Read;
    const BLOCK: usize = 4 << 20;
    let label = path.display().to_string();
    let fail = |e: std::io::Error| format!("cannot read the file ({e}): {label}");
    let mut file = std::fs::File::open(path).map_err(fail)?;
    let size = file.metadata().map_err(fail)?.len();
    if let Some(p) = progress {
        p.set_total(size);
    }
    let mut bytes = Vec::with_capacity(usize::try_from(size).unwrap_or(0));
    let mut hasher = Sha256::new();
    loop {
        if progress.is_some_and(Progress::is_cancelled) {
            return Err(format!("reading was cancelled: {label}"));
        }
        let before = bytes.len();
        let got = (&mut file)
            .take(BLOCK as u64)
            .read_to_end(&mut bytes)
            .map_err(fail)?;
        hasher.update(&bytes[before..]);
        if let Some(p) = progress {
            p.add_read((bytes.len() - before) as u64);
        }
        if got == 0 {
            break;
        }
    }
    let sha = format!("{:x}", hasher.finalize());
    Ok((label, std::borrow::Cow::Owned(bytes), Some(sha)))
}

fn run_job(job: Job) -> Outcome {
    match job {
        Job::Import {
            id,
            name,
            source,
            options,
        } => {
            // The bytes are read here rather than by the importer so that their SHA-256 (which
            // a saved session compares) is of exactly what was fitted.
            let progress = options.progress.as_deref();
            let read = match source {
                Source::Bytes(bytes) => Ok((name.clone(), std::borrow::Cow::Borrowed(bytes), None)),
                Source::Path(path) => read_file(&path, progress),
                Source::Dropped(handle) => {
                    let path = handle.path();
                    if path.is_file() {
                        read_file(path, progress)
                    } else {
                        handle
                            .bytes()
                            .map(|b| (name.clone(), std::borrow::Cow::Owned(b), None))
                            .map_err(|e| format!("cannot read the dropped file ({e}): {name}"))
                    }
                }
            };
            // Bytes already in memory count as read.
            if let (Some(p), Ok((_, bytes, _))) = (progress, &read)
                && p.read() == 0
            {
                p.set_total(bytes.len() as u64);
                p.add_read(bytes.len() as u64);
            }
            let result = read.and_then(|(label, bytes, sha)| {
                let sha = sha.unwrap_or_else(|| format!("{:x}", Sha256::digest(&bytes)));
                import_bytes(&label, &bytes, &options)
                    .map_err(|e| crate::messages::import_error(&e))
                    .and_then(RunData::new)
                    .map(|mut d| {
                        d.sha256 = Some(sha);
                        Arc::new(d)
                    })
            });
            Outcome::Imported { id, result }
        }
        Job::Fit {
            id,
            generation,
            data,
            cell,
            options,
            model,
            inputs,
        } => {
            let result = analyze_model(&data.trace, &data.step, &cell, &options, model, &inputs)
                .map(|r| Arc::new(FitView::new(r, &data)))
                .map_err(|e| e.to_string());
            Outcome::Fitted {
                id,
                generation,
                result,
            }
        }
    }
}
