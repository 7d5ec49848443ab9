//! The application: the runs, the panels around them, the background worker, and the glue
//! that turns an edit into a refit.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::mpsc::{Receiver, TryRecvError, channel};

use diffusor_fit::cell::Cell;
use diffusor_fit::window::BoundChoice;
use eframe::egui::{self, RichText};
use serde::{Deserialize, Serialize};

use crate::cell_form::{CellPanel, FitChoices};
use crate::compare::ComparePanel;
use crate::export::{self, ExportKind};
use crate::files_window::{FilesAction, FilesWindow, Notice, SaveKind};
use crate::help::{self, HelpWindow};
use crate::plots::{PlotInput, PlotPrefs, PlotsPanel, Which};
use crate::results::{CAUTION, ResultAction, ResultPanel};
use crate::runs::{FitState, Import, Origin, PALETTE, Run, RunId};
use crate::runs_panel::{RunsAction, RunsPanel};
use crate::session::{self, Session};
use crate::worker::{Job, Outcome, Source, Worker};

/// The key the preferences are stored under; the suffix is their schema version.
pub const PREFS_KEY: &str = "diffusor.prefs/1";

/// Light, dark, or as the system says.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
pub enum ThemeChoice {
    /// Follow the system.
    #[default]
    System,
    /// Light.
    Light,
    /// Dark.
    Dark,
}

/// What the window remembers between starts (the runs and the cell are not: a start shows the
/// demo, or the files named on the command line).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(default)]
pub struct Prefs {
    /// The theme.
    pub theme: ThemeChoice,
    /// Axis choices of the plots.
    pub plots: PlotPrefs,
}

/// The two views of the central area.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum View {
    /// One run's fit: four plots.
    #[default]
    Fit,
    /// The selected runs compared as replicates.
    Replicates,
}

/// What a file dialog was shown for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Purpose {
    OpenRuns,
    Save(SaveKind),
    OpenSession,
}

/// The Diffusor window. Drive it with [`DiffusorApp::ui`]; [`crate::run`] puts it in a native
/// window.
#[derive(Debug)]
pub struct DiffusorApp {
    prefs: Prefs,
    cell: CellPanel,
    runs: Vec<Run>,
    focus: Option<RunId>,
    view: View,
    runs_panel: RunsPanel,
    plots: PlotsPanel,
    results: ResultPanel,
    compare: ComparePanel,
    help: HelpWindow,
    worker: Option<Worker>,
    queue: Vec<Job>,
    next_id: u64,
    /// The cell and choices the runs were last fitted with.
    fitted_with: Option<(Cell, FitChoices)>,
    /// The cell entries have a problem, so results are for the last valid ones.
    stale: bool,
    /// Paths coming back from a file dialog's thread, and what they are for.
    dialog: Option<(Purpose, Receiver<Option<Vec<PathBuf>>>)>,
    files: FilesWindow,
    /// Where the session was last saved or opened from (Ctrl+S writes there again).
    session_path: Option<PathBuf>,
    /// The answer of the export being written, when one is.
    writing: Option<Receiver<Result<String, String>>>,
    /// The egui context, once the first frame has given it (for repaints from other threads).
    ctx: Option<egui::Context>,
    status: Option<String>,
    styled: bool,
    /// Jobs handed to the worker and answered since it was last idle: the progress bar.
    progress: Progress,
}

/// How far the background work has come since it was last idle.
#[derive(Debug, Clone, Copy, Default)]
struct Progress {
    sent: usize,
    answered: usize,
    since: Option<std::time::Instant>,
}

impl DiffusorApp {
    /// A window with `files` loaded, or the bundled demo set (fitted with the demo's cell)
    /// when there are none.
    pub fn new(files: &[PathBuf]) -> Self {
        let mut app = DiffusorApp {
            prefs: Prefs::default(),
            cell: CellPanel::default(),
            runs: Vec::new(),
            focus: None,
            view: View::Fit,
            runs_panel: RunsPanel::default(),
            plots: PlotsPanel::default(),
            results: ResultPanel::default(),
            compare: ComparePanel::default(),
            help: HelpWindow::default(),
            worker: None,
            queue: Vec::new(),
            next_id: 1,
            fitted_with: None,
            stale: false,
            dialog: None,
            files: FilesWindow::default(),
            session_path: None,
            writing: None,
            ctx: None,
            status: None,
            styled: false,
            progress: Progress::default(),
        };
        if files.is_empty() {
            app.load_demo();
        } else {
            for f in files {
                app.open_path(f);
            }
        }
        app
    }

    /// The window as a fresh start shows it: the demo set with the demo's cell.
    pub fn demo() -> Self {
        Self::new(&[])
    }

    /// Applies remembered preferences.
    pub fn with_prefs(mut self, prefs: Prefs) -> Self {
        self.prefs = prefs;
        self.plots.prefs = prefs.plots;
        self
    }

    fn load_demo(&mut self) {
        self.cell = CellPanel::demo();
        for f in crate::demo::FILES {
            let id = self.add_run(format!("{} (demo)", f.name), Origin::Demo);
            if let Some(run) = self.run_mut(id) {
                run.selected = f.selected;
            }
            self.queue_import(
                id,
                f.name.to_owned(),
                Source::Bytes(f.bytes),
                Box::default(),
            );
        }
    }

    fn add_run(&mut self, name: String, origin: Origin) -> RunId {
        let id = RunId(self.next_id);
        self.next_id += 1;
        let used: Vec<_> = self.runs.iter().map(|r| r.colour).collect();
        let colour = PALETTE
            .iter()
            .copied()
            .find(|c| !used.contains(c))
            .unwrap_or(PALETTE[(id.0 as usize) % PALETTE.len()]);
        self.runs.push(Run {
            id,
            name,
            origin,
            colour,
            selected: true,
            import: Import::Loading(Arc::default()),
            lo: Default::default(),
            hi: Default::default(),
            fit: FitState::default(),
            generations: 0,
            cancelled_through: 0,
            expected_sha256: None,
            notice: None,
            columns: Default::default(),
            model: Default::default(),
        });
        if self.focus.is_none() {
            self.focus = Some(id);
        }
        id
    }

    /// Opens a file by its path (read and fitted in the background). A `.json` file is taken
    /// for a saved session and replaces the runs (a refused one leaves them as they were and
    /// says why in the Save & export window), so `diffusor gui review.diffusor-session.json`
    /// reopens what a colleague saw.
    pub fn open_path(&mut self, path: &Path) {
        if is_session_name(path) {
            self.open_session_reporting(path);
            return;
        }
        let name = file_name(path);
        let id = self.add_run(name.clone(), Origin::File(path.to_path_buf()));
        self.focus = Some(id);
        self.queue_import(id, name, Source::Path(path.to_path_buf()), Box::default());
    }

    fn open_dropped(&mut self, file: egui::DroppedFileHandle) {
        let path = file.path().to_path_buf();
        if is_session_name(&path) && path.is_file() {
            self.open_session_reporting(&path);
            return;
        }
        let name = if path.as_os_str().is_empty() {
            "dropped file".to_owned()
        } else {
            file_name(&path)
        };
        let id = self.add_run(name.clone(), Origin::Dropped(path));
        self.focus = Some(id);
        self.queue_import(id, name, Source::Dropped(file), Box::default());
    }

    /// Every run, in the order of the list.
    pub fn runs(&self) -> &[Run] {
        &self.runs
    }

    /// The run in focus.
    pub fn focused(&self) -> Option<&Run> {
        self.focus
            .and_then(|id| self.runs.iter().find(|r| r.id == id))
    }

    /// Whether an import or a fit is still running.
    pub fn is_busy(&self) -> bool {
        !self.queue.is_empty() || self.runs.iter().any(Run::busy) || self.writing.is_some()
    }

    /// The cell and electrode entries and the fit choices.
    pub fn cell_panel(&self) -> &CellPanel {
        &self.cell
    }

    /// The plots' view state.
    pub fn plots(&self) -> &PlotsPanel {
        &self.plots
    }

    /// The view shown in the central area.
    pub fn view(&self) -> View {
        self.view
    }

    fn run_mut(&mut self, id: RunId) -> Option<&mut Run> {
        self.runs.iter_mut().find(|r| r.id == id)
    }

    /// Asks for a fit of run `id` with the current cell, choices and its window.
    fn request_fit(&mut self, id: RunId) {
        let Ok(cell) = self.cell.form.cell() else {
            return;
        };
        let choices = self.cell.choices;
        let Some(run) = self.runs.iter_mut().find(|r| r.id == id) else {
            return;
        };
        let Some(data) = run.data().cloned() else {
            return;
        };
        // Entries with a problem are flagged where they are typed; the last fit stays.
        let Ok(inputs) = run.model.inputs() else {
            return;
        };
        run.generations += 1;
        run.fit.pending = Some(run.generations);
        self.queue.push(Job::Fit {
            id,
            generation: run.generations,
            data,
            cell,
            options: Box::new(choices.options(run.lo.choice, run.hi.choice)),
            model: run.model.kind,
            inputs: Box::new(inputs),
        });
    }

    fn refit_all(&mut self) {
        let ids: Vec<RunId> = self.runs.iter().map(|r| r.id).collect();
        for id in ids {
            self.request_fit(id);
        }
    }

    fn automatic_window(&mut self, id: RunId) {
        if let Some(run) = self.run_mut(id) {
            run.lo = Default::default();
            run.hi = Default::default();
        }
        self.request_fit(id);
    }

    fn receive(&mut self, outcome: Outcome) {
        match outcome {
            Outcome::Imported { id, result } => {
                let Some(run) = self.run_mut(id) else { return };
                // A cancelled import's answer comes too late to be wanted.
                if !matches!(run.import, Import::Loading(_)) {
                    return;
                }
                match result {
                    Ok(data) => {
                        if let Some(expected) = &run.expected_sha256
                            && data.sha256.as_ref() != Some(expected)
                        {
                            run.notice = Some(format!(
                                "this file has changed since the session was saved (SHA-256 now {}…, then {}…): the results may differ from what was seen",
                                data.sha256
                                    .as_deref()
                                    .unwrap_or("?")
                                    .get(..12)
                                    .unwrap_or("?"),
                                expected.get(..12).unwrap_or(expected)
                            ));
                        }
                        run.import = Import::Ready(data);
                        self.request_fit(id);
                    }
                    Err(e) => {
                        run.import = Import::Failed(e);
                        // A file that cannot be read takes no part in overlays or comparisons.
                        run.selected = false;
                    }
                }
            }
            Outcome::Fitted {
                id,
                generation,
                result,
            } => {
                let Some(run) = self.run_mut(id) else { return };
                if generation <= run.cancelled_through {
                    return;
                }
                if run.fit.pending == Some(generation) {
                    run.fit.pending = None;
                }
                if generation < run.fit.latest_generation {
                    return;
                }
                if let Ok(view) = &result {
                    let w = &view.result.window;
                    // The fields show the bounds used, unless the user is typing in them.
                    for (field, t) in [(&mut run.lo, w.lo.time_s), (&mut run.hi, w.hi.time_s)] {
                        if field.text.trim() == field.shown.trim() {
                            field.show_time(t);
                        }
                    }
                }
                run.fit.latest = Some(result);
                run.fit.latest_generation = generation;
                run.fit.outdated = false;
            }
        }
    }

    fn start_dialog(&mut self) {
        self.show_dialog(Purpose::OpenRuns);
    }

    fn show_dialog(&mut self, purpose: Purpose) {
        let (tx, rx) = channel();
        let pick = move || {
            let dialog = rfd::FileDialog::new();
            let files = match purpose {
                Purpose::OpenRuns => dialog
                    .set_title("Open current–time files")
                    .add_filter("Text and CSV", &["csv", "txt", "dat", "tsv", "asc"])
                    .add_filter("All files", &["*"])
                    .pick_files(),
                Purpose::OpenSession => dialog
                    .set_title("Open a Diffusor session")
                    .add_filter("Session (JSON)", &["json"])
                    .pick_file()
                    .map(|p| vec![p]),
                Purpose::Save(kind) => dialog
                    .set_title("Save")
                    .set_file_name(kind.default_name())
                    .add_filter(kind.extension(), &[kind.extension()])
                    .save_file()
                    .map(|p| vec![p]),
            };
            // The window may be gone by the time the dialog closes; nothing then to tell.
            let _ = tx.send(files);
        };
        // macOS wants dialogs on the main thread; elsewhere the dialog runs beside the window,
        // which keeps drawing.
        if cfg!(target_os = "macos") {
            pick();
            self.dialog = Some((purpose, rx));
        } else {
            match std::thread::Builder::new()
                .name("diffusor-file-dialog".to_owned())
                .spawn(pick)
            {
                Ok(_) => self.dialog = Some((purpose, rx)),
                Err(e) => self.status = Some(format!("cannot show the file dialog: {e}")),
            }
        }
    }

    fn poll_dialog(&mut self) {
        let Some((purpose, rx)) = &self.dialog else {
            return;
        };
        let purpose = *purpose;
        match rx.try_recv() {
            Ok(Some(paths)) => {
                self.dialog = None;
                match purpose {
                    Purpose::OpenRuns => {
                        for p in paths {
                            self.open_path(&p);
                        }
                    }
                    Purpose::Save(kind) => {
                        if let Some(p) = paths.into_iter().next() {
                            self.files.save_path = p.display().to_string();
                            self.save(kind, &p);
                        }
                    }
                    Purpose::OpenSession => {
                        if let Some(p) = paths.into_iter().next() {
                            self.files.session_path = p.display().to_string();
                            self.open_session_reporting(&p);
                        }
                    }
                }
            }
            Ok(None) | Err(TryRecvError::Disconnected) => {
                self.dialog = None;
                match purpose {
                    Purpose::OpenRuns => {
                        self.status = Some("No file chosen. If no dialog appeared (no desktop portal), drop files onto the window, type a path in the Runs panel, or name them on the command line.".to_owned());
                    }
                    Purpose::Save(_) | Purpose::OpenSession => {
                        self.files.notice = Some(Notice::Failed("No file chosen. If no dialog appeared (no desktop portal), type the path in the field and press the button beside it.".to_owned()));
                    }
                }
            }
            Err(TryRecvError::Empty) => {}
        }
    }

    /// Writes `kind` to `path` (an extension is added when the name has none) and says in the
    /// Save & export window what came of it.
    pub fn save(&mut self, kind: SaveKind, path: &Path) {
        let path = export::with_extension(path, kind.extension());
        if self.writing.is_some() {
            self.files.notice = Some(Notice::Failed(
                "still writing the last file: wait for it to finish".to_owned(),
            ));
            return;
        }
        // The report and the CSV of a long trace take seconds to write, so they are written on
        // a thread of their own from a copy of the runs (their data are shared, not copied).
        let job: Box<dyn FnOnce() -> Result<String, String> + Send> = match kind {
            SaveKind::Export(ExportKind::Report) => {
                let Ok(cell) = self.cell.form.cell() else {
                    self.fail("the cell entries have a problem (see the Cell & electrode panel): fix them before exporting".to_owned());
                    return;
                };
                let options = self
                    .cell
                    .choices
                    .options(BoundChoice::Auto, BoundChoice::Auto);
                let runs = self.runs.clone();
                Box::new(move || {
                    let html = export::report_html(&runs, &cell, &options)?;
                    export::write_atomic(&path, html.as_bytes())?;
                    Ok(format!(
                        "Wrote the report of {} run{} to {}",
                        runs.len(),
                        if runs.len() == 1 { "" } else { "s" },
                        path.display()
                    ))
                })
            }
            SaveKind::Export(ExportKind::ResultsJson) => {
                let Ok(cell) = self.cell.form.cell() else {
                    self.fail("the cell entries have a problem (see the Cell & electrode panel): fix them before exporting".to_owned());
                    return;
                };
                let runs = self.runs.clone();
                Box::new(move || {
                    let text = export::results_json(&runs, &cell)?;
                    export::write_atomic(&path, text.as_bytes())?;
                    Ok(format!(
                        "Wrote the results of {} run{} to {}",
                        runs.len(),
                        if runs.len() == 1 { "" } else { "s" },
                        path.display()
                    ))
                })
            }
            SaveKind::Export(ExportKind::DataCsv) => {
                let Some(run) = self.focused().cloned() else {
                    self.fail("no run in focus: click a run in the Runs panel first".to_owned());
                    return;
                };
                Box::new(move || {
                    export::export_data_csv(&run, &path)?;
                    Ok(format!(
                        "Wrote the data of {} to {}",
                        run.name,
                        path.display()
                    ))
                })
            }
            SaveKind::Session => {
                let result = self.save_session(&path).map(|skipped| {
                    let mut text = format!("Saved the session to {}", path.display());
                    if skipped > 0 {
                        text.push_str(&format!(
                            " ({skipped} dropped run{} without a file path left out: save such files to disk and open them by path)",
                            if skipped == 1 { "" } else { "s" }
                        ));
                    }
                    text
                });
                self.finish_save(result);
                return;
            }
        };
        let (tx, rx) = channel();
        let ctx = self.ctx.clone();
        let spawned = std::thread::Builder::new()
            .name("diffusor-export".to_owned())
            .spawn(move || {
                // The window may have closed meanwhile; then nobody waits for the answer.
                let _ = tx.send(job());
                if let Some(ctx) = ctx {
                    ctx.request_repaint();
                }
            });
        match spawned {
            Ok(_) => {
                self.writing = Some(rx);
                self.files.notice = None;
            }
            Err(e) => self.fail(format!("cannot start writing the file: {e}")),
        }
    }

    fn fail(&mut self, message: String) {
        self.finish_save(Err(message));
    }

    fn finish_save(&mut self, result: Result<String, String>) {
        self.files.notice = Some(match result {
            Ok(t) => Notice::Done(t),
            Err(e) => {
                self.files.open = true;
                Notice::Failed(e)
            }
        });
    }

    fn poll_writing(&mut self) {
        let Some(rx) = &self.writing else { return };
        match rx.try_recv() {
            Ok(result) => {
                self.writing = None;
                self.finish_save(result);
            }
            Err(TryRecvError::Disconnected) => {
                self.writing = None;
                self.fail("writing the file stopped unexpectedly; try again".to_owned());
            }
            Err(TryRecvError::Empty) => {}
        }
    }

    /// The HTML report of every run, as `diffusor report` makes it.
    ///
    /// # Errors
    ///
    /// When there are no runs, or the cell entries cannot be used.
    pub fn report_html(&self) -> Result<String, String> {
        let cell = self.cell.form.cell().map_err(|_| {
            "the cell entries have a problem (see the Cell & electrode panel): fix them before exporting".to_owned()
        })?;
        let options = self
            .cell
            .choices
            .options(BoundChoice::Auto, BoundChoice::Auto);
        export::report_html(&self.runs, &cell, &options)
    }

    /// The session as it stands, and how many runs could not be put in it (dropped without a
    /// path on disk).
    pub fn session(&self) -> (Session, usize) {
        let mut skipped = 0;
        let mut runs = Vec::new();
        let mut focus = None;
        for run in &self.runs {
            let source = match &run.origin {
                Origin::Demo => session::RunSource::Demo {
                    name: run.name.trim_end_matches(" (demo)").to_owned(),
                },
                Origin::File(p) | Origin::Dropped(p) if !p.as_os_str().is_empty() => {
                    let p = std::path::absolute(p).unwrap_or_else(|_| p.clone());
                    session::RunSource::File {
                        path: p.display().to_string(),
                    }
                }
                Origin::File(_) | Origin::Dropped(_) => {
                    skipped += 1;
                    continue;
                }
            };
            let bound = |c: BoundChoice| match c {
                BoundChoice::Auto => None,
                BoundChoice::At(t) => Some(t),
            };
            if Some(run.id) == self.focus {
                focus = Some(runs.len());
            }
            runs.push(session::SessionRun {
                source,
                // A run still being read keeps the hash its session gave it, if any.
                sha256: run
                    .data()
                    .and_then(|d| d.sha256.clone())
                    .or_else(|| run.expected_sha256.clone()),
                selected: run.selected,
                window_lo_s: bound(run.lo.choice),
                window_hi_s: bound(run.hi.choice),
                model: session::model_name(run.model.kind).to_owned(),
                model_entries: session::ModelEntries::of(&run.model),
                time_column: run.columns.time.trim().to_owned(),
                current_column: run.columns.current.trim().to_owned(),
            });
        }
        let s = Session {
            schema: session::SCHEMA.to_owned(),
            program_version: env!("CARGO_PKG_VERSION").to_owned(),
            cell: session::CellEntries::of(&self.cell.form),
            choices: self.cell.choices.into(),
            runs,
            focus,
        };
        (s, skipped)
    }

    /// Saves the session to `path`, atomically; returns how many runs were left out.
    ///
    /// # Errors
    ///
    /// The message to show.
    pub fn save_session(&mut self, path: &Path) -> Result<usize, String> {
        let (s, skipped) = self.session();
        export::write_atomic(path, s.to_json().as_bytes())?;
        self.session_path = Some(path.to_path_buf());
        Ok(skipped)
    }

    fn open_session_reporting(&mut self, path: &Path) {
        match self.open_session(path) {
            Ok(n) => {
                self.files.notice = Some(Notice::Done(format!(
                    "Opened the session {} ({n} run{})",
                    path.display(),
                    if n == 1 { "" } else { "s" }
                )));
            }
            Err(e) => {
                self.files.open = true;
                self.files.notice = Some(Notice::Failed(format!("{e}. Nothing was changed.")));
            }
        }
    }

    /// Replaces the runs, cell entries, choices and windows with those of the session at
    /// `path`, and returns how many runs it holds. A file that cannot be read as a whole
    /// session changes nothing.
    ///
    /// # Errors
    ///
    /// Why the file was refused.
    pub fn open_session(&mut self, path: &Path) -> Result<usize, String> {
        let shown = path.display().to_string();
        let text = std::fs::read_to_string(path)
            .map_err(|e| format!("cannot read the session ({e}): {shown}"))?;
        let s = session::parse(&text, &shown)?;
        let form = s.cell.form()?;
        let base = path.parent().map(Path::to_path_buf);
        self.runs.clear();
        self.focus = None;
        self.queue.clear();
        self.fitted_with = None;
        self.cell.form = form;
        self.cell.choices = s.choices.into();
        let mut ids = Vec::new();
        for saved in &s.runs {
            let id = match &saved.source {
                session::RunSource::Demo { name } => {
                    let demo = crate::demo::FILES.iter().find(|f| f.name == name);
                    let id = self.add_run(format!("{name} (demo)"), Origin::Demo);
                    match demo {
                        Some(f) => self.queue_import(
                            id,
                            f.name.to_owned(),
                            Source::Bytes(f.bytes),
                            Box::default(),
                        ),
                        None => {
                            if let Some(run) = self.run_mut(id) {
                                run.import = Import::Failed(format!(
                                    "this version has no demo file named {name}"
                                ));
                            }
                        }
                    }
                    id
                }
                session::RunSource::File { path: p } => {
                    let mut p = PathBuf::from(p);
                    // A session moved together with its files (another machine, a shared
                    // folder) finds them beside it; the hash still tells whether they are the
                    // same bytes.
                    if !p.is_file()
                        && let (Some(dir), Some(name)) = (&base, p.file_name())
                        && dir.join(name).is_file()
                    {
                        p = dir.join(name);
                    }
                    let name = file_name(&p);
                    let id = self.add_run(name.clone(), Origin::File(p.clone()));
                    let columns = crate::runs::ColumnFields {
                        time: saved.time_column.clone(),
                        current: saved.current_column.clone(),
                    };
                    self.queue_import(id, name, Source::Path(p), Box::new(columns.options()));
                    if let Some(run) = self.run_mut(id) {
                        run.columns = columns;
                    }
                    id
                }
            };
            if let Some(run) = self.run_mut(id) {
                run.selected = saved.selected;
                run.expected_sha256.clone_from(&saved.sha256);
                for (field, bound) in [
                    (&mut run.lo, saved.window_lo_s),
                    (&mut run.hi, saved.window_hi_s),
                ] {
                    if let Some(t) = bound {
                        field.choice = BoundChoice::At(t);
                        field.show_time(t);
                    }
                }
                let kind = session::model_kind(&saved.model).unwrap_or_else(|e| {
                    run.notice = Some(e);
                    None
                });
                // `parse` has checked the entries.
                if let Ok(fields) = saved.model_entries.fields(kind) {
                    run.model = fields;
                }
            }
            ids.push(id);
        }
        self.focus = s
            .focus
            .and_then(|k| ids.get(k).copied())
            .or(ids.first().copied());
        self.session_path = Some(path.to_path_buf());
        Ok(ids.len())
    }

    fn files_actions(&mut self, actions: Vec<FilesAction>) {
        for a in actions {
            match a {
                FilesAction::Save { kind, path } => self.save(kind, &path),
                FilesAction::BrowseSave(kind) => self.show_dialog(Purpose::Save(kind)),
                FilesAction::BrowseSession => self.show_dialog(Purpose::OpenSession),
                FilesAction::OpenSession(p) => self.open_session_reporting(&p),
            }
        }
    }

    /// The Save & export window's view state.
    pub fn files_window(&self) -> &FilesWindow {
        &self.files
    }

    /// Queues the reading of run `id`, with a fresh progress count the run shows and a
    /// cancel can stop.
    fn queue_import(
        &mut self,
        id: RunId,
        name: String,
        source: Source,
        mut options: Box<diffusor_trace::ImportOptions>,
    ) {
        let progress = Arc::new(diffusor_trace::Progress::default());
        if let Some(run) = self.run_mut(id) {
            run.import = Import::Loading(Arc::clone(&progress));
        }
        options.progress = Some(progress);
        self.queue.push(Job::Import {
            id,
            name,
            source,
            options,
        });
    }

    /// Reads run `id`'s file again with the columns named in its fields.
    pub fn read_again(&mut self, id: RunId) {
        let Some(run) = self.run_mut(id) else { return };
        let source = match &run.origin {
            Origin::Demo => crate::demo::FILES
                .iter()
                .find(|f| run.name == format!("{} (demo)", f.name))
                .map(|f| Source::Bytes(f.bytes)),
            Origin::File(p) | Origin::Dropped(p) if p.is_file() => Some(Source::Path(p.clone())),
            Origin::File(_) | Origin::Dropped(_) => None,
        };
        let Some(source) = source else {
            run.import = Import::Failed(
                "this file came without a path on disk and cannot be read again: drop it onto the window once more"
                    .to_owned(),
            );
            return;
        };
        run.fit = crate::runs::FitState::default();
        run.selected = true;
        let options = Box::new(run.columns.options());
        let name = run.name.clone();
        self.queue_import(id, name, source, options);
    }

    /// Stops the reading and fitting in progress: queued work is dropped, runs being read are
    /// marked as cancelled, fits being computed keep their previous result, and answers still
    /// on their way are ignored when they come.
    pub fn cancel_work(&mut self) {
        if let Some(w) = &self.worker {
            w.cancel();
        }
        self.queue.clear();
        let mut stopped = 0;
        for run in &mut self.runs {
            if let Import::Loading(p) = &run.import {
                // The importer stops at its next block; its answer is ignored.
                p.cancel();
                run.import = Import::Failed(
                    "reading was cancelled: open the file again (Open files…, or type its path) to read it"
                        .to_owned(),
                );
                run.selected = false;
                stopped += 1;
            }
            if run.fit.pending.take().is_some() {
                run.cancelled_through = run.generations;
                run.fit.outdated = true;
                stopped += 1;
            }
        }
        // `fitted_with` is left as it is: resetting it would refit everything at the next frame
        // and undo the cancel. The runs whose fit was stopped say that their result is older.
        self.progress = Progress::default();
        self.status = Some(format!(
            "Cancelled {stopped} step{}. Refit (Ctrl+R) to fit again.",
            if stopped == 1 { "" } else { "s" }
        ));
    }

    fn focus_step(&mut self, step: isize) {
        if self.runs.is_empty() {
            return;
        }
        let at = self
            .focus
            .and_then(|id| self.runs.iter().position(|r| r.id == id))
            .unwrap_or(0);
        let n = self.runs.len() as isize;
        let next = (at as isize + step).rem_euclid(n) as usize;
        self.focus = Some(self.runs[next].id);
    }

    fn toggle_theme(&mut self, ctx: &egui::Context) {
        let next = match ctx.theme() {
            egui::Theme::Dark => ThemeChoice::Light,
            egui::Theme::Light => ThemeChoice::Dark,
        };
        self.prefs.theme = next;
        apply_theme(ctx, next);
    }

    fn shortcuts(&mut self, ctx: &egui::Context) {
        let pressed = |s| ctx.input_mut(|i| i.consume_shortcut(&s));
        // The most specific first: Ctrl+Shift+R before Ctrl+R.
        if pressed(help::AUTO_WINDOW)
            && let Some(id) = self.focus
        {
            self.automatic_window(id);
        }
        if pressed(help::REFIT) {
            self.refit_all();
        }
        if pressed(help::OPEN) {
            self.start_dialog();
        }
        if pressed(help::THEME) {
            self.toggle_theme(ctx);
        }
        if pressed(help::FIT_VIEW) {
            self.view = View::Fit;
        }
        if pressed(help::REPLICATE_VIEW) {
            self.view = View::Replicates;
        }
        if pressed(help::HELP) {
            self.help.open = !self.help.open;
        }
        if self.is_busy() && pressed(help::CANCEL) {
            self.cancel_work();
        }
        if pressed(help::EXPORT) {
            self.files.open = !self.files.open;
        }
        if pressed(help::SAVE_SESSION) {
            match self.session_path.clone() {
                Some(p) => self.save(SaveKind::Session, &p),
                None => {
                    self.files.kind = SaveKind::Session;
                    self.files.open = true;
                }
            }
        }
        if pressed(help::NEXT_RUN) {
            self.focus_step(1);
        }
        if pressed(help::PREVIOUS_RUN) {
            self.focus_step(-1);
        }
    }

    /// Draws the whole window inside `ui` and does what the user asked.
    pub fn ui(&mut self, ui: &mut egui::Ui) {
        let ctx = ui.ctx().clone();
        if self.ctx.is_none() {
            self.ctx = Some(ctx.clone());
        }
        if !self.styled {
            apply_style(&ctx);
            apply_theme(&ctx, self.prefs.theme);
            self.styled = true;
        }
        if self.worker.is_none() {
            match Worker::spawn(ctx.clone()) {
                Ok(w) => self.worker = Some(w),
                Err(e) => self.status = Some(format!("cannot start the background worker: {e}")),
            }
        }
        if let Some(w) = &self.worker {
            for o in w.received() {
                self.progress.answered += 1;
                self.receive(o);
            }
        }
        if !self.is_busy() {
            self.progress = Progress::default();
        }
        for f in ctx.input(|i| i.raw.dropped_files.clone()) {
            self.open_dropped(f);
        }
        self.poll_dialog();
        self.poll_writing();
        self.files.writing = self.writing.is_some();
        self.shortcuts(&ctx);

        self.top_bar_ui(ui);
        self.status_bar_ui(ui);
        egui::Panel::left("runs-panel")
            .default_size(350.0)
            .size_range(280.0..=460.0)
            .show(ui, |ui| self.left_ui(ui));
        if self.view == View::Fit {
            egui::Panel::right("result-panel")
                .default_size(330.0)
                .size_range(300.0..=520.0)
                .show(ui, |ui| self.result_ui(ui));
        }
        egui::CentralPanel::default().show(ui, |ui| match self.view {
            View::Fit => {
                let input = PlotInput {
                    runs: &self.runs,
                    focus: self.focus,
                };
                if let Some(d) = self.plots.ui(ui, &input) {
                    if let Some(run) = self.run_mut(d.id) {
                        let field = match d.which {
                            Which::Lo => &mut run.lo,
                            Which::Hi => &mut run.hi,
                        };
                        field.choice = BoundChoice::At(d.time_s);
                        field.show_time(d.time_s);
                    }
                    self.request_fit(d.id);
                }
                self.prefs.plots = self.plots.prefs;
            }
            View::Replicates => self.compare.ui(ui, &self.runs),
        });
        self.help.show(&ctx);
        let actions = self.files.show(&ctx);
        self.files_actions(actions);
        if ctx.input(|i| !i.raw.hovered_files.is_empty()) {
            drop_hint(&ctx);
        }

        // An edit of the cell or the choices refits every run; an invalid entry keeps the last
        // results, marked as such.
        match self.cell.form.cell() {
            Ok(cell) => {
                self.stale = false;
                let now = (cell, self.cell.choices);
                if self.fitted_with.as_ref() != Some(&now) {
                    self.fitted_with = Some(now);
                    // Runs still being read are fitted when their data arrive.
                    self.refit_all();
                }
            }
            Err(_) => self.stale = self.fitted_with.is_some(),
        }
        if let Some(w) = &self.worker {
            for job in self.queue.drain(..) {
                self.progress.sent += 1;
                self.progress
                    .since
                    .get_or_insert_with(std::time::Instant::now);
                if !w.send(job) {
                    self.status =
                        Some("the background worker stopped; restart Diffusor".to_owned());
                    break;
                }
            }
        }
        if self.dialog.is_some() {
            ctx.request_repaint_after(std::time::Duration::from_millis(100));
        }
    }

    fn top_bar_ui(&mut self, ui: &mut egui::Ui) {
        egui::Panel::top("top-bar").show(ui, |ui| {
            ui.horizontal(|ui| {
                ui.heading("Diffusor");
                ui.weak("diffusion coefficients from potential-step transients");
                ui.separator();
                ui.selectable_value(&mut self.view, View::Fit, "Fit")
                    .on_hover_text("One run's fit and plots (Ctrl+1)");
                ui.selectable_value(&mut self.view, View::Replicates, "Replicates")
                    .on_hover_text("The ticked runs compared (Ctrl+2)");
                ui.separator();
                if ui
                    .button("Refit")
                    .on_hover_text("Fit every run again (Ctrl+R)")
                    .clicked()
                {
                    self.refit_all();
                }
                if ui
                    .button("Save & export…")
                    .on_hover_text("Report, data, session (Ctrl+E)")
                    .clicked()
                {
                    self.files.open = !self.files.open;
                }
                ui.with_layout(egui::Layout::right_to_left(egui::Align::Center), |ui| {
                    if ui
                        .button("Help")
                        .on_hover_text("Shortcuts and notes (F1)")
                        .clicked()
                    {
                        self.help.open = !self.help.open;
                    }
                    ui.separator();
                    // Right to left: Dark is drawn before Light so they read "Light Dark".
                    let dark = ui.visuals().dark_mode;
                    for (choice, name, on) in [
                        (ThemeChoice::Dark, "Dark", dark),
                        (ThemeChoice::Light, "Light", !dark),
                    ] {
                        if ui
                            .selectable_label(on, name)
                            .on_hover_text("Theme (Ctrl+T switches)")
                            .clicked()
                        {
                            self.prefs.theme = choice;
                            apply_theme(ui.ctx(), choice);
                        }
                    }
                });
            });
        });
    }

    fn status_bar_ui(&mut self, ui: &mut egui::Ui) {
        egui::Panel::bottom("status-bar").show(ui, |ui| {
            ui.horizontal(|ui| {
                let busy = self.runs.iter().filter(|r| r.busy()).count();
                if busy > 0 {
                    ui.spinner();
                    let reading = self
                        .runs
                        .iter()
                        .find(|r| matches!(r.import, Import::Loading(_)))
                        .map(|r| r.name.as_str());
                    let what = match reading {
                        Some(name) => format!("reading {name}"),
                        None => "fitting".to_owned(),
                    };
                    ui.label(format!(
                        "{what}; {busy} run{} to go",
                        if busy == 1 { "" } else { "s" }
                    ));
                    let p = self.progress;
                    let total = p.sent.max(1);
                    let secs = p.since.map_or(0.0, |t| t.elapsed().as_secs_f32());
                    ui.add(
                        egui::ProgressBar::new(p.answered.min(total) as f32 / total as f32)
                            .desired_width(160.0)
                            .text(format!(
                                "{} of {} steps, {secs:.0} s",
                                p.answered.min(total),
                                p.sent
                            )),
                    )
                    .on_hover_text("Each file is one step to read and one to fit");
                    if ui
                        .button("Cancel")
                        .on_hover_text("Stop reading and fitting (Esc); the results so far stay")
                        .clicked()
                    {
                        self.cancel_work();
                    }
                    ui.separator();
                    // The elapsed time moves even when no answer comes.
                    ui.ctx()
                        .request_repaint_after(std::time::Duration::from_millis(250));
                }
                if let Some(s) = &self.status {
                    ui.colored_label(ui.visuals().warn_fg_color, s);
                    if ui.small_button("dismiss").clicked() {
                        self.status = None;
                    }
                } else {
                    ui.add(egui::Label::new(RichText::new(CAUTION).small().weak()).truncate());
                }
            });
        });
    }

    fn left_ui(&mut self, ui: &mut egui::Ui) {
        egui::ScrollArea::vertical()
            .id_salt("left-scroll")
            .show(ui, |ui| {
                ui.heading("Runs");
                let actions = self.runs_panel.ui(ui, &mut self.runs, self.focus);
                for a in actions {
                    match a {
                        RunsAction::OpenDialog => self.start_dialog(),
                        RunsAction::OpenPath(p) => self.open_path(&p),
                        RunsAction::Focus(id) => self.focus = Some(id),
                        RunsAction::Remove(id) => {
                            self.runs.retain(|r| r.id != id);
                            if self.focus == Some(id) {
                                self.focus = self.runs.first().map(|r| r.id);
                            }
                        }
                    }
                }
                ui.separator();
                ui.heading("Cell & electrode");
                ui.weak("Applies to every run.");
                self.cell.ui(ui);
            });
    }

    fn result_ui(&mut self, ui: &mut egui::Ui) {
        egui::ScrollArea::vertical()
            .id_salt("result-scroll")
            .show(ui, |ui| {
                ui.heading("Result");
                let focus = self.focus;
                let stale = self.stale;
                let run = focus.and_then(|id| self.runs.iter_mut().find(|r| r.id == id));
                match self.results.ui(ui, run, stale) {
                    Some(ResultAction::WindowEdited | ResultAction::ModelChanged) => {
                        if let Some(id) = focus {
                            self.request_fit(id);
                        }
                    }
                    Some(ResultAction::AutomaticWindow) => {
                        if let Some(id) = focus {
                            self.automatic_window(id);
                        }
                    }
                    Some(ResultAction::ReadAgain) => {
                        if let Some(id) = focus {
                            self.read_again(id);
                        }
                    }
                    None => {}
                }
            });
    }
}

/// Whether a path names a session file rather than a trace: traces are text tables, and the
/// program writes sessions as `.json`.
fn is_session_name(path: &Path) -> bool {
    path.extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("json"))
}

fn file_name(path: &Path) -> String {
    path.file_name().map_or_else(
        || path.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    )
}

/// A readable scale on a laptop screen: body text at 14 points, headings at 18.
///
/// Hack (the monospace font egui bundles) backs up the proportional font for the signs it
/// lacks: the superscript minus of 10⁻⁶, arrows, ▲; DejaVu Sans (bundled in `assets/fonts`)
/// backs up both for the mathematical signs of the models' equations and ranges (≫, ≤, θ…),
/// which neither has and which would otherwise show as empty boxes.
pub(crate) fn apply_style(ctx: &egui::Context) {
    use egui::{FontFamily, FontId, TextStyle};
    let mut fonts = egui::FontDefinitions::default();
    fonts.font_data.insert(
        "DejaVuSans".to_owned(),
        Arc::new(egui::FontData::from_static(include_bytes!(
            "../../../assets/fonts/DejaVuSans.ttf"
        ))),
    );
    if let Some(family) = fonts.families.get_mut(&FontFamily::Proportional) {
        family.push("Hack".to_owned());
        family.push("DejaVuSans".to_owned());
    }
    if let Some(family) = fonts.families.get_mut(&FontFamily::Monospace) {
        family.push("DejaVuSans".to_owned());
    }
    ctx.set_fonts(fonts);
    ctx.all_styles_mut(|style| {
        style.text_styles = [
            (
                TextStyle::Heading,
                FontId::new(18.0, FontFamily::Proportional),
            ),
            (TextStyle::Body, FontId::new(14.0, FontFamily::Proportional)),
            (
                TextStyle::Button,
                FontId::new(14.0, FontFamily::Proportional),
            ),
            (
                TextStyle::Small,
                FontId::new(11.5, FontFamily::Proportional),
            ),
            (
                TextStyle::Monospace,
                FontId::new(13.0, FontFamily::Monospace),
            ),
        ]
        .into();
        style.spacing.item_spacing = egui::vec2(8.0, 5.0);
    });
}

fn apply_theme(ctx: &egui::Context, theme: ThemeChoice) {
    ctx.set_theme(match theme {
        ThemeChoice::System => egui::ThemePreference::System,
        ThemeChoice::Light => egui::ThemePreference::Light,
        ThemeChoice::Dark => egui::ThemePreference::Dark,
    });
}

fn drop_hint(ctx: &egui::Context) {
    let screen = ctx.content_rect();
    let painter = ctx.layer_painter(egui::LayerId::new(
        egui::Order::Foreground,
        egui::Id::unique("drop-hint"),
    ));
    painter.rect_filled(screen, 0.0, egui::Color32::from_black_alpha(150));
    painter.text(
        screen.center(),
        egui::Align2::CENTER_CENTER,
        "Drop current–time files to open them",
        egui::FontId::proportional(22.0),
        egui::Color32::WHITE,
    );
}

impl eframe::App for DiffusorApp {
    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        DiffusorApp::ui(self, ui);
    }

    fn save(&mut self, storage: &mut dyn eframe::Storage) {
        eframe::set_value(storage, PREFS_KEY, &self.prefs);
    }
}

#[cfg(test)]
mod tests {
    use eframe::egui::{self, FontFamily, FontId};

    /// Every character beyond ASCII in the sources of the window and of the fitting engine
    /// (whose equations, ranges and warnings the window shows) has a glyph in the fonts the
    /// window installs: a missing one shows as an empty box, and in the interface tests as a
    /// panic only when that very text happens to be on screen.
    #[test]
    fn every_sign_the_window_and_the_engine_write_has_a_glyph() {
        fn walk(dir: &std::path::Path, out: &mut std::collections::BTreeSet<char>) {
            for entry in std::fs::read_dir(dir).expect("source directory") {
                let path = entry.expect("entry").path();
                if path.is_dir() {
                    walk(&path, out);
                } else if path.extension().is_some_and(|e| e == "rs") {
                    let text = std::fs::read_to_string(&path).expect("source");
                    out.extend(text.chars().filter(|c| !c.is_ascii()));
                }
            }
        }
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        let mut signs = std::collections::BTreeSet::new();
        walk(&root.join("src"), &mut signs);
        walk(&root.join("../fit/src"), &mut signs);
        assert!(signs.contains(&'≫') && signs.contains(&'τ'), "{signs:?}");
        let ctx = egui::Context::default();
        super::apply_style(&ctx);
        // The font atlas of the one pass is not drawn anywhere; egui wants that said.
        ctx.run_ui(egui::RawInput::default(), |_| {})
            .textures_delta
            .clear();
        for family in [FontFamily::Proportional, FontFamily::Monospace] {
            let font = FontId::new(14.0, family.clone());
            let missing: String =
                ctx.fonts_mut(|f| signs.iter().filter(|&&c| !f.has_glyph(&font, c)).collect());
            assert!(missing.is_empty(), "{family:?} lacks {missing:?}");
        }
    }
}
