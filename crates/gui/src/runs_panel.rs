//! The "Runs" list: every loaded file with its colour, status and result, the run in focus,
//! the runs selected for overlays and the comparison, and the ways to open more.

use std::path::PathBuf;

use eframe::egui::{self, RichText};

use crate::format::{sci, sci_interval};
use crate::runs::{Import, Run, RunId};

/// What the list asks of the application.
#[derive(Debug, Clone, PartialEq)]
pub enum RunsAction {
    /// Show the native open dialog.
    OpenDialog,
    /// Open a file by its path.
    OpenPath(PathBuf),
    /// Put this run in focus.
    Focus(RunId),
    /// Remove this run.
    Remove(RunId),
}

/// The list's view state.
#[derive(Debug, Clone, Default)]
pub struct RunsPanel {
    /// The path being typed in the "open by path" field.
    pub path_text: String,
}

/// The stage of a run's reading as a bar `width` points wide, or `otherwise` (weak) while the
/// size of the file is not known.
pub fn reading_bar(ui: &mut egui::Ui, run: &Run, width: f32, otherwise: &str) {
    match run.reading_progress() {
        Some((stage, done)) => {
            ui.add(
                egui::ProgressBar::new(done)
                    .desired_width(width)
                    .text(format!("{stage} {:.0} %", 100.0 * done)),
            );
        }
        None => {
            ui.weak(otherwise);
        }
    }
}

/// One line on a run's state: its result, or what is happening, or what went wrong.
pub fn status_text(run: &Run) -> (String, StatusKind) {
    if let Some(e) = run.error() {
        let what = if matches!(run.import, Import::Failed(_)) {
            "cannot read"
        } else {
            "fit failed"
        };
        return (format!("{what}: {e}"), StatusKind::Error);
    }
    match run.fit_view() {
        Some(f) => {
            let r = &f.result;
            let text = if let Some(d) = r.diffusion_m2_s {
                format!("D = {} cm²/s", value_and_interval(d, 1e4))
            } else if let Some(a) = r.area_m2 {
                format!("A = {} cm²", sci(a.value * 1e4, 4))
            } else if let Some(e) = r.nac_mol_m {
                format!("n·A·C = {} mol/cm", sci(e.value * 1e-2, 4))
            } else {
                "slope only (enter A and C)".to_owned()
            };
            let kind = if r.warnings.is_empty() {
                StatusKind::Done
            } else {
                StatusKind::DoneWithWarnings(r.warnings.len())
            };
            (text, kind)
        }
        None if run.busy() => ("working…".to_owned(), StatusKind::Busy),
        None => (
            "waiting for valid cell entries".to_owned(),
            StatusKind::Busy,
        ),
    }
}

/// `7.010 (7.009 … 7.011) × 10⁻⁶`: a value and its 95 % interval sharing one exponent, after
/// multiplying by `factor`.
pub fn value_and_interval(e: diffusor_fit::planar::Estimate, factor: f64) -> String {
    let v = e.value * factor;
    if !(v.is_finite() && v != 0.0) {
        return sci(v, 4);
    }
    let exp = v.abs().log10().floor() as i32;
    let scale = 10f64.powi(exp);
    let (m, lo, hi) = (
        v / scale,
        e.ci95[0] * factor / scale,
        e.ci95[1] * factor / scale,
    );
    // Rounding can carry the mantissa to 10.000; the scientific form of the value then says so.
    if m.abs() >= 9.9995 {
        return format!(
            "{} ({})",
            sci(v, 4),
            sci_interval(e.ci95[0] * factor, e.ci95[1] * factor, 4)
        );
    }
    let tail = if exp == 0 {
        String::new()
    } else {
        format!(" × 10{}", crate::format::superscript(exp))
    };
    format!("{m:.3} ({lo:.3} … {hi:.3}){tail}")
}

/// How a run's status is marked.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StatusKind {
    /// Reading or fitting.
    Busy,
    /// Fitted.
    Done,
    /// Fitted, with this many warnings.
    DoneWithWarnings(usize),
    /// Failed.
    Error,
}

impl RunsPanel {
    /// Draws the list and the open controls.
    pub fn ui(
        &mut self,
        ui: &mut egui::Ui,
        runs: &mut [Run],
        focus: Option<RunId>,
    ) -> Vec<RunsAction> {
        let mut actions = Vec::new();
        ui.horizontal(|ui| {
            if ui
                .button("Open files…")
                .on_hover_text("Choose current–time files (Ctrl+O)")
                .clicked()
            {
                actions.push(RunsAction::OpenDialog);
            }
            ui.weak("or drop them here");
        });
        ui.horizontal(|ui| {
            let l = ui.label("Path");
            let r = ui
                .add(
                    egui::TextEdit::singleline(&mut self.path_text)
                        .desired_width(ui.available_width() - 8.0)
                        .hint_text("type a file path, then Enter"),
                )
                .labelled_by(l.id);
            if r.lost_focus()
                && ui.input(|i| i.key_pressed(egui::Key::Enter))
                && !self.path_text.trim().is_empty()
            {
                actions.push(RunsAction::OpenPath(PathBuf::from(self.path_text.trim())));
                self.path_text.clear();
            }
        });
        ui.add_space(4.0);
        if runs.is_empty() {
            ui.weak("No runs loaded.");
        }
        if runs.iter().any(Run::is_demo) {
            ui.add(egui::Label::new(RichText::new(crate::demo::NOTE).small().weak()).wrap());
        }
        for run in runs.iter_mut() {
            ui.push_id(run.id.0, |ui| {
                let is_focus = focus == Some(run.id);
                ui.horizontal(|ui| {
                    ui.checkbox(&mut run.selected, "").on_hover_text(
                        "Overlay in the plots and include in the replicate comparison",
                    );
                    let (rect, _) =
                        ui.allocate_exact_size(egui::vec2(12.0, 12.0), egui::Sense::hover());
                    ui.painter().rect_filled(rect, 2.0, run.colour);
                    if ui
                        .selectable_label(is_focus, &run.name)
                        .on_hover_text("Show this run's fit")
                        .clicked()
                    {
                        actions.push(RunsAction::Focus(run.id));
                    }
                    ui.with_layout(egui::Layout::right_to_left(egui::Align::Center), |ui| {
                        if ui
                            .small_button("×")
                            .on_hover_text("Remove this run")
                            .clicked()
                        {
                            actions.push(RunsAction::Remove(run.id));
                        }
                    });
                });
                let (text, kind) = status_text(run);
                ui.horizontal_top(|ui| {
                    ui.add_space(20.0);
                    match kind {
                        StatusKind::Busy => {
                            ui.spinner();
                            reading_bar(ui, run, 180.0, &text);
                        }
                        StatusKind::Error => {
                            // The advice is in the Result panel; the list keeps to the error.
                            let (what, todo) = crate::messages::split(&text);
                            ui.add(
                                egui::Label::new(
                                    RichText::new(what).color(ui.visuals().error_fg_color),
                                )
                                .wrap(),
                            )
                            .on_hover_text(todo.unwrap_or("see the Result panel"));
                        }
                        StatusKind::Done | StatusKind::DoneWithWarnings(_) => {
                            if run.busy() {
                                ui.spinner();
                            }
                            ui.label(RichText::new(text).small());
                            if let StatusKind::DoneWithWarnings(n) = kind {
                                ui.colored_label(ui.visuals().warn_fg_color, format!("▲ {n}"))
                                    .on_hover_text("warnings from the fit: see the Result panel");
                            }
                        }
                    }
                });
                if run.fit.outdated {
                    ui.horizontal_top(|ui| {
                        ui.add_space(20.0);
                        ui.colored_label(
                            ui.visuals().warn_fg_color,
                            "▲ fit cancelled: this result is from before the last change (Refit updates it)",
                        );
                    });
                }
                if let Some(n) = &run.notice {
                    ui.horizontal_top(|ui| {
                        ui.add_space(20.0);
                        ui.add(
                            egui::Label::new(
                                RichText::new(format!("▲ {n}")).color(ui.visuals().warn_fg_color),
                            )
                            .wrap(),
                        );
                    });
                }
            });
        }
        actions
    }
}
