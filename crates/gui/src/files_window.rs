//! The "Save & export" window: what to write (the report, the run in focus as CSV, the
//! session), where (a typed path, or the system's save dialog when there is one), and opening
//! a saved session. The writing itself is the application's ([`crate::export`],
//! [`crate::session`]); this is the view state and its controls.

use std::path::PathBuf;

use eframe::egui::{self, RichText};

use crate::export::ExportKind;

/// Something the window can save.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SaveKind {
    /// An export (the report unless chosen otherwise).
    Export(ExportKind),
    /// The session file.
    Session,
}

impl Default for SaveKind {
    fn default() -> Self {
        SaveKind::Export(ExportKind::Report)
    }
}

impl SaveKind {
    /// Every choice, in the order listed.
    pub const ALL: [SaveKind; 4] = [
        SaveKind::Export(ExportKind::Report),
        SaveKind::Export(ExportKind::ResultsJson),
        SaveKind::Export(ExportKind::DataCsv),
        SaveKind::Session,
    ];

    /// Its name in the window.
    pub fn label(self) -> &'static str {
        match self {
            SaveKind::Export(k) => k.label(),
            SaveKind::Session => "Session (runs, cell entries, windows; to reopen later)",
        }
    }

    /// The file extension.
    pub fn extension(self) -> &'static str {
        match self {
            SaveKind::Export(k) => k.extension(),
            SaveKind::Session => "json",
        }
    }

    /// A file name to start from.
    pub fn default_name(self) -> &'static str {
        match self {
            SaveKind::Export(k) => k.default_name(),
            SaveKind::Session => "diffusor-session.json",
        }
    }
}

/// What the window asks of the application.
#[derive(Debug, Clone, PartialEq)]
pub enum FilesAction {
    /// Write `kind` to `path`.
    Save {
        /// What.
        kind: SaveKind,
        /// Where.
        path: PathBuf,
    },
    /// Show the system's save dialog for `kind`.
    BrowseSave(SaveKind),
    /// Show the system's open dialog for a session.
    BrowseSession,
    /// Open the session at this path.
    OpenSession(PathBuf),
}

/// The outcome of the last action, shown in the window.
#[derive(Debug, Clone, PartialEq)]
pub enum Notice {
    /// It worked; what was done.
    Done(String),
    /// It did not; why, and what to do.
    Failed(String),
}

/// The window's view state.
#[derive(Debug, Clone, Default)]
pub struct FilesWindow {
    /// Whether it is shown.
    pub open: bool,
    /// What the Save button writes.
    pub kind: SaveKind,
    /// Where to save, as typed.
    pub save_path: String,
    /// The session to open, as typed.
    pub session_path: String,
    /// The outcome of the last save or open.
    pub notice: Option<Notice>,
    /// A file is being written (set by the application each frame).
    pub writing: bool,
}

impl FilesWindow {
    /// Shows the window when open.
    pub fn show(&mut self, ctx: &egui::Context) -> Vec<FilesAction> {
        let mut actions = Vec::new();
        let mut open = self.open;
        egui::Window::new("Save & export")
            .open(&mut open)
            // Over the plots, clear of the Runs list and of the Help window's place.
            .default_pos([380.0, 40.0])
            .default_width(560.0)
            .show(ctx, |ui| actions = self.ui(ui));
        self.open = open;
        actions
    }

    /// The window's contents.
    pub fn ui(&mut self, ui: &mut egui::Ui) -> Vec<FilesAction> {
        let mut actions = Vec::new();
        ui.strong("Save");
        for kind in SaveKind::ALL {
            if ui.radio(self.kind == kind, kind.label()).clicked() {
                self.kind = kind;
            }
        }
        ui.horizontal(|ui| {
            let l = ui.label("Save to");
            ui.add(
                egui::TextEdit::singleline(&mut self.save_path)
                    .desired_width(ui.available_width() - 90.0)
                    .hint_text(format!("a file path, e.g. {}", self.kind.default_name())),
            )
            .labelled_by(l.id);
            if ui
                .button("Browse…")
                .on_hover_text("Choose the file with the system's dialog (needs a desktop portal)")
                .clicked()
            {
                actions.push(FilesAction::BrowseSave(self.kind));
            }
        });
        let typed = self.save_path.trim();
        if ui
            .add_enabled(!typed.is_empty(), egui::Button::new("Save"))
            .on_disabled_hover_text("Type a path first, or use Browse…")
            .clicked()
        {
            actions.push(FilesAction::Save {
                kind: self.kind,
                path: PathBuf::from(typed),
            });
        }
        ui.separator();
        ui.strong("Open a saved session");
        ui.weak("Replaces the runs, cell entries and windows with the session's.");
        ui.horizontal(|ui| {
            let l = ui.label("Session file");
            let r = ui
                .add(
                    egui::TextEdit::singleline(&mut self.session_path)
                        .desired_width(ui.available_width() - 90.0)
                        .hint_text("path of a diffusor-session.json"),
                )
                .labelled_by(l.id);
            if ui.button("Browse…").clicked() {
                actions.push(FilesAction::BrowseSession);
            }
            let typed = self.session_path.trim();
            if r.lost_focus() && ui.input(|i| i.key_pressed(egui::Key::Enter)) && !typed.is_empty()
            {
                actions.push(FilesAction::OpenSession(PathBuf::from(typed)));
            }
        });
        let typed = self.session_path.trim();
        if ui
            .add_enabled(!typed.is_empty(), egui::Button::new("Open session"))
            .clicked()
        {
            actions.push(FilesAction::OpenSession(PathBuf::from(typed)));
        }
        if self.writing {
            ui.separator();
            ui.horizontal(|ui| {
                ui.spinner();
                ui.label("Writing…");
            });
        }
        if let Some(n) = &self.notice {
            ui.separator();
            let (text, colour) = match n {
                Notice::Done(t) => (t, ui.visuals().text_color()),
                Notice::Failed(t) => (t, ui.visuals().error_fg_color),
            };
            ui.add(egui::Label::new(RichText::new(text).color(colour)).wrap());
        }
        actions
    }
}
