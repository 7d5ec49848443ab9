//! The "Result" panel: the focused run's D (or n·A·C and area) with its standard error, 95 %
//! interval and expanded uncertainty, the window as typed and why its bounds sit where they
//! do, fit quality and residual tests, the parameters, the uncertainty budget, the
//! window-sensitivity curves and the engine's warnings. Every number is the engine's; this
//! module only chooses units and words.

use std::ops::RangeInclusive;

use diffusor_fit::analysis::{ModelKind, ModelResult};
use diffusor_fit::models::microdisk::DiskExpression;
use diffusor_fit::planar::{Estimate, PlanarResult, Sensitivity};
use eframe::egui::{self, Color32, RichText};
use egui_plot::{HLine, Line, MarkerShape, Plot, Points, Span, VLine};

use crate::format::{self, percent, plain, sci, sci_interval};
use crate::plots::{Scale, log_time_axis, prefixed};
use crate::runs::{BoundField, Import, Run};

/// What the panel asks of the application.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ResultAction {
    /// A window bound was typed: refit the run.
    WindowEdited,
    /// Back to the automatic window: refit the run.
    AutomaticWindow,
    /// Read the file again with the columns named.
    ReadAgain,
    /// The model or one of its entries changed: refit the run.
    ModelChanged,
}

/// The "Result" panel's view state (the collapsible sections keep their own).
#[derive(Debug, Clone, Default)]
pub struct ResultPanel {}

/// The caution shown with every result.
pub const CAUTION: &str = "D follows from the electrode size, concentration and n you entered (or, for the models that fit C, from the size and n): check them. Validate the method against a standard of known D before using results for decisions, and follow your local safety rules and the reagents' safety data sheets.";

/// A value in an SI unit of the engine, shown in the unit of the trade.
pub fn in_trade_units(value: f64, unit: &str) -> String {
    match unit {
        "m²" => format!("{} cm²", sci(value * 1e4, 4)),
        "m²/s" => format!("{} cm²/s", sci(value * 1e4, 4)),
        "mol/m³" => format!("{} mM", plain(value, 4)),
        "mol/m" => format!("{} mol/cm", sci(value * 1e-2, 4)),
        "s" => format::time(value),
        "A" => diffusor_trace::format_si(value, "A", 4),
        "A·s^½" => diffusor_trace::format_si(value, "A·s^½", 5),
        "m/s" => format!("{} cm/s", sci(value * 1e2, 4)),
        "mol/m²" => format!("{} mol/cm²", sci(value * 1e-4, 4)),
        "C" | "F" | "Ω" | "m" | "C/s^½" => diffusor_trace::format_si(value, unit, 4),
        "1" => sci(value, 4),
        _ => format!("{} {unit}", sci(value, 4)),
    }
}

/// The headline quantity of a result: its name, the estimate, the factor from SI to the unit
/// shown and that unit.
fn headline(r: &ModelResult) -> Option<(&'static str, Estimate, f64, &'static str)> {
    headline_of(r.diffusion_m2_s, r.area_m2, r.nac_mol_m)
}

fn headline_of(
    d: Option<Estimate>,
    area: Option<Estimate>,
    nac: Option<Estimate>,
) -> Option<(&'static str, Estimate, f64, &'static str)> {
    if let Some(d) = d {
        return Some(("D", d, 1e4, "cm²/s"));
    }
    if let Some(a) = area {
        return Some(("A (electroactive)", a, 1e4, "cm²"));
    }
    nac.map(|e| ("n·A·C", e, 1e-2, "mol/cm"))
}

fn planar_headline(r: &PlanarResult) -> Option<(&'static str, Estimate, f64, &'static str)> {
    headline_of(r.diffusion_m2_s, r.area_m2, r.nac_mol_m)
}

fn estimate_lines_ui(ui: &mut egui::Ui, name: &str, e: Estimate, factor: f64, unit: &str) {
    ui.label(
        RichText::new(format!("{name} = {} {unit}", sci(e.value * factor, 4)))
            .size(20.0)
            .strong(),
    );
    ui.label(format!(
        "standard error {} {unit} ({})",
        sci(e.std_error * factor, 2),
        percent(100.0 * e.std_error / e.value.abs())
    ));
    ui.label(format!(
        "95 % interval {} {unit}",
        sci_interval(e.ci95[0] * factor, e.ci95[1] * factor, 4)
    ));
}

fn bound_field_ui(ui: &mut egui::Ui, label: &str, field: &mut BoundField) -> bool {
    let l = ui.label(label);
    let response = ui
        .add(
            egui::TextEdit::singleline(&mut field.text)
                .desired_width(72.0)
                .hint_text("auto"),
        )
        .labelled_by(l.id);
    let submitted = response.lost_focus();
    submitted && {
        match field.take_edit() {
            Some(choice) => {
                field.choice = choice;
                field.shown = field.text.clone();
                true
            }
            None => false,
        }
    }
}

fn wrapped(ui: &mut egui::Ui, text: impl Into<RichText>) {
    ui.add(egui::Label::new(text.into()).wrap());
}

fn warn_colour(ui: &egui::Ui) -> Color32 {
    ui.visuals().warn_fg_color
}

impl ResultPanel {
    /// Draws the panel for `run`; `stale` says the cell entries have a problem, so the result
    /// shown is for the last good ones.
    pub fn ui(
        &mut self,
        ui: &mut egui::Ui,
        run: Option<&mut Run>,
        stale: bool,
    ) -> Option<ResultAction> {
        let Some(run) = run else {
            ui.weak("Open a file, or select a run in the list.");
            return None;
        };
        ui.horizontal(|ui| {
            let (rect, _) = ui.allocate_exact_size(egui::vec2(12.0, 12.0), egui::Sense::hover());
            ui.painter().rect_filled(rect, 2.0, run.colour);
            ui.strong(&run.name);
            if run.busy() {
                ui.spinner();
            }
        });
        if run.is_demo() {
            wrapped(ui, RichText::new(crate::demo::NOTE).small().weak());
        }
        match &run.import {
            Import::Loading(_) => {
                ui.horizontal(|ui| {
                    ui.spinner();
                    crate::runs_panel::reading_bar(ui, run, 200.0, "reading the file…");
                });
                return None;
            }
            Import::Failed(e) => {
                // The importer's sentence in red; the advice under it in the normal colour, so
                // it reads as what to do rather than as more of the error.
                let (what, todo) = crate::messages::split(e);
                wrapped(
                    ui,
                    RichText::new(format!("The file could not be read: {what}"))
                        .color(ui.visuals().error_fg_color),
                );
                if let Some(todo) = todo {
                    ui.add_space(4.0);
                    ui.strong("What to do");
                    wrapped(ui, RichText::new(todo));
                }
                return columns_ui(ui, &mut run.columns);
            }
            Import::Ready(_) => {}
        }
        let mut action = None;
        if stale {
            wrapped(
                ui,
                RichText::new("The cell entries have a problem (see the left panel); the result below is for the last valid entries.")
                    .color(warn_colour(ui)),
            );
        }
        match run.fit.latest.clone() {
            None => {
                ui.horizontal(|ui| {
                    ui.spinner();
                    ui.label("fitting…");
                });
            }
            Some(Err(e)) => {
                wrapped(
                    ui,
                    RichText::new(format!("The fit failed: {e}"))
                        .color(ui.visuals().error_fg_color),
                );
                action = model_ui(ui, run, None).or(action);
                ui.separator();
                action = window_ui(ui, run, None).or(action);
            }
            Some(Ok(fit)) => {
                let r = &fit.result;
                ui.add_space(4.0);
                match headline(r) {
                    Some((name, e, factor, unit)) => {
                        estimate_lines_ui(ui, name, e, factor, unit);
                        if let Some(c) = r.conc_mol_m3 {
                            ui.label(format!(
                                "C = {} mM (95 % interval {} mM), fitted with D",
                                plain(c.value, 4),
                                sci_interval(c.ci95[0], c.ci95[1], 4)
                            ));
                        }
                        if let Some(b) = r.planar().and_then(|p| p.budget.as_ref()) {
                            let factor = match b.unit {
                                "mol/m" => 1e-2,
                                _ => 1e4,
                            };
                            ui.label(format!(
                                "U (k = 2) with the inputs' uncertainties: {} {unit} ({})",
                                sci(b.expanded_uncertainty * factor, 2),
                                percent(100.0 * b.expanded_uncertainty / b.value.abs())
                            ));
                        }
                        if r.mode == "inverse"
                            && let (Some(nac), true) = (r.nac_mol_m, r.area_m2.is_some())
                        {
                            ui.label(format!(
                                "n·A·C = {} mol/cm (95 % interval {})",
                                sci(nac.value * 1e-2, 4),
                                sci_interval(nac.ci95[0] * 1e-2, nac.ci95[1] * 1e-2, 4)
                            ));
                        }
                    }
                    None if r.planar().is_some() => {
                        ui.label("Only the Cottrell slope was fitted: enter the area and the concentration for D, or a known D for n·A·C.");
                    }
                    None => {
                        ui.label("This model gives no D with these entries; its parameters are listed below.");
                    }
                }
                let note = if r.planar().is_some() {
                    "The standard error and 95 % interval are the fit's own (widened for correlated residuals); U adds the uncertainties of A and C."
                } else {
                    "The standard error and 95 % interval are the fit's own, from its residuals; the uncertainties of the cell entries are not added for this model."
                };
                wrapped(ui, RichText::new(note).small().weak());
                wrapped(ui, RichText::new(CAUTION).small().weak());
                ui.separator();
                action = model_ui(ui, run, Some(r)).or(action);
                ui.separator();
                action = window_ui(ui, run, Some(r)).or(action);
                ui.separator();
                warnings_ui(ui, &r.warnings);
                match r.planar() {
                    Some(p) => details_ui(ui, p),
                    None => model_details_ui(ui, r),
                }
            }
        }
        if let Some(data) = run.data() {
            egui::CollapsingHeader::new("Import")
                .id_salt("import-notes")
                .show(ui, |ui| {
                    ui.label(format!(
                        "{} rows, sampled every {}; {} potential step{} (the first is fitted)",
                        data.trace.rows(),
                        format::time(data.trace.sampling_interval_s()),
                        data.steps,
                        if data.steps == 1 { "" } else { "s" }
                    ));
                    if data.sign_reversed {
                        ui.label("cathodic step: the current's sign is reversed for the fit and the plots");
                    }
                    for w in &data.trace.warnings {
                        wrapped(
                            ui,
                            RichText::new(crate::messages::import_warning(&w.message))
                                .color(warn_colour(ui)),
                        );
                    }
                });
        }
        action
    }
}

/// Fields to name the time and current columns (a position from 1, or the header text) and a
/// button to read the file again with them.
fn columns_ui(ui: &mut egui::Ui, columns: &mut crate::runs::ColumnFields) -> Option<ResultAction> {
    ui.add_space(6.0);
    ui.strong("Columns");
    let mut action = None;
    egui::Grid::new("columns").num_columns(2).show(ui, |ui| {
        for (label, text) in [
            ("Time column", &mut columns.time),
            ("Current column", &mut columns.current),
        ] {
            let l = ui.label(label);
            ui.add(
                egui::TextEdit::singleline(text)
                    .desired_width(140.0)
                    .hint_text("e.g. 1"),
            )
            .labelled_by(l.id);
            ui.end_row();
        }
    });
    ui.weak(
        "A position from 1 (1 = first column) or the column's header; empty lets Diffusor guess.",
    );
    if ui.button("Read again").clicked() {
        action = Some(ResultAction::ReadAgain);
    }
    action
}

fn window_ui(ui: &mut egui::Ui, run: &mut Run, r: Option<&ModelResult>) -> Option<ResultAction> {
    ui.strong("Fitting window");
    let mut action = None;
    ui.horizontal(|ui| {
        if bound_field_ui(ui, "Start (s)", &mut run.lo) {
            action = Some(ResultAction::WindowEdited);
        }
        ui.add_space(8.0);
        if bound_field_ui(ui, "End (s)", &mut run.hi) {
            action = Some(ResultAction::WindowEdited);
        }
    });
    for e in [&run.lo.error, &run.hi.error].into_iter().flatten() {
        ui.colored_label(ui.visuals().error_fg_color, e);
    }
    let automatic = r.is_none_or(|r| r.window.lo.automatic && r.window.hi.automatic);
    ui.horizontal(|ui| {
        if ui
            .add_enabled(
                !automatic || run.lo.choice != run.hi.choice,
                egui::Button::new("Automatic window"),
            )
            .on_hover_text("Both bounds back to the engine's choice (Ctrl+Shift+R)")
            .clicked()
        {
            action = Some(ResultAction::AutomaticWindow);
        }
    });
    wrapped(
        ui,
        RichText::new("Enter applies a typed bound (seconds after the step); empty or “auto” means automatic. The bounds can also be dragged on the transient.")
            .small()
            .weak(),
    );
    if let Some(w) = r.map(|r| &r.window) {
        for (side, b) in [("starts", &w.lo), ("ends", &w.hi)] {
            let lead = if side == "starts" { "Window" } else { "and" };
            let text = if b.automatic {
                format!(
                    "{lead} {side} at {} (automatic): {}",
                    format::time(b.time_s),
                    b.description
                )
            } else {
                format!("{lead} {side} at {} (set by you)", format::time(b.time_s))
            };
            wrapped(ui, text);
        }
        ui.label(format!("{} points in the window", w.points));
    }
    action
}

fn warnings_ui(ui: &mut egui::Ui, warnings: &[String]) {
    if warnings.is_empty() {
        ui.label("No warnings from the fit.");
        return;
    }
    ui.strong(format!("Warnings ({})", warnings.len()));
    for w in warnings {
        ui.horizontal_top(|ui| {
            ui.colored_label(warn_colour(ui), "▲");
            wrapped(ui, w.as_str());
        });
    }
}

/// A small text field for a model entry, with its problem in red under it; `true` when the
/// user leaves it (Enter or a click elsewhere), which refits.
fn entry_ui(
    ui: &mut egui::Ui,
    label: &str,
    text: &mut String,
    hint: &str,
    problem: Option<&String>,
) -> bool {
    let left = ui
        .horizontal(|ui| {
            let l = ui.label(label);
            ui.add(
                egui::TextEdit::singleline(text)
                    .desired_width(80.0)
                    .hint_text(hint),
            )
            .labelled_by(l.id)
            .lost_focus()
        })
        .inner;
    if let Some(p) = problem {
        ui.colored_label(ui.visuals().error_fg_color, p);
    }
    left
}

/// The model of the run: a choice among the engine's models (or its default for the
/// geometry), the entries the chosen one needs, and what the geometry check recommends.
fn model_ui(ui: &mut egui::Ui, run: &mut Run, r: Option<&ModelResult>) -> Option<ResultAction> {
    let heading = ui.strong("Model");
    let before = run.model.clone();
    let fields = &mut run.model;
    let default_label =
        r.filter(|r| r.choice.by_default)
            .map_or("Default for the geometry".to_owned(), |r| {
                format!(
                    "Default for the geometry: {}",
                    crate::model_form::label(r.model)
                )
            });
    let shown = match fields.kind {
        Some(k) => crate::model_form::label(k).to_owned(),
        None => default_label.clone(),
    };
    egui::ComboBox::from_id_salt("model-choice")
        .selected_text(shown)
        .width(250.0)
        .show_ui(ui, |ui| {
            ui.selectable_value(&mut fields.kind, None, default_label);
            for k in ModelKind::ALL {
                ui.selectable_value(&mut fields.kind, Some(k), crate::model_form::label(k))
                    .on_hover_text(crate::model_form::needs(k));
            }
        })
        .response
        .labelled_by(heading.id)
        .on_hover_text("Which transport law is fitted to this run; the cell entries on the left apply to every model");
    let problems = fields.inputs().err().unwrap_or_default();
    let mut edited = false;
    let kind = fields.kind.or(r.map(|r| r.model));
    match kind {
        Some(ModelKind::Microdisk) => {
            ui.horizontal(|ui| {
                ui.label("Disk expression");
                ui.radio_value(
                    &mut fields.disk,
                    DiskExpression::MahonOldham,
                    "Mahon–Oldham",
                )
                .on_hover_text("Mahon & Oldham (2005), two branches; the more accurate");
                ui.radio_value(&mut fields.disk, DiskExpression::ShoupSzabo, "Shoup–Szabo")
                    .on_hover_text("Shoup & Szabo (1982), one closed form within 0.6 %");
            });
        }
        Some(ModelKind::Kinetic) => {
            ui.checkbox(
                &mut fields.irreversible,
                "Negligible back reaction (kb = 0)",
            );
            if !fields.irreversible {
                edited |= entry_ui(
                    ui,
                    "kb/kf at the step",
                    &mut fields.kb_over_kf,
                    "e.g. 0.05",
                    problems.kb_over_kf.as_ref(),
                );
                edited |= entry_ui(
                    ui,
                    "D_R/D_O",
                    &mut fields.dr_over_do,
                    "1",
                    problems.dr_over_do.as_ref(),
                );
            }
        }
        Some(ModelKind::CottrellCharging) => {
            edited |= entry_ui(
                ui,
                "Step height (mV)",
                &mut fields.step_mv,
                "from file",
                problems.step.as_ref(),
            );
        }
        _ => {}
    }
    if kind == Some(ModelKind::Slab) || !fields.thickness_um.trim().is_empty() {
        edited |= entry_ui(
            ui,
            "Film thickness (µm)",
            &mut fields.thickness_um,
            "L",
            problems.thickness.as_ref(),
        );
    }
    let mut action = None;
    if let Some(r) = r {
        if let Some(rec) = r.choice.recommended_model() {
            ui.horizontal_wrapped(|ui| {
                ui.label(format!(
                    "Recommended for this electrode: {}",
                    crate::model_form::label(rec)
                ));
                if rec != r.model && ui.small_button("Use it").clicked() {
                    run.model.kind = Some(rec);
                    action = Some(ResultAction::ModelChanged);
                }
            });
        }
        if let Some(rec) = &r.choice.recommended {
            wrapped(
                ui,
                RichText::new(format!("Why: {}", rec.reason)).small().weak(),
            );
        }
        if !r.in_validity_range {
            wrapped(
                ui,
                RichText::new(format!(
                    "The data lie outside this model's range ({}): {}",
                    r.validity, r.validity_check
                ))
                .color(warn_colour(ui)),
            );
        }
    }
    let changed = run.model.kind != before.kind
        || run.model.disk != before.disk
        || run.model.irreversible != before.irreversible
        || edited;
    if changed && run.model.inputs().is_ok() {
        action = Some(ResultAction::ModelChanged);
    }
    action
}

/// Fit quality, parameters and the model's equation for a model other than Cottrell's.
fn model_details_ui(ui: &mut egui::Ui, r: &ModelResult) {
    egui::CollapsingHeader::new("Fit quality")
        .default_open(true)
        .show(ui, |ui| {
            let sd_unit = if r.fitted_quantity == "charge" {
                "C"
            } else {
                "A"
            };
            let rows = [
                ("R²", format!("{:.6}", r.r2)),
                (
                    "residual SD",
                    diffusor_trace::format_si(r.residual_sd, sd_unit, 3),
                ),
                ("points", r.points.to_string()),
                ("degrees of freedom", format!("{:.0}", r.degrees_of_freedom)),
                (
                    "solver",
                    if r.iterations == 0 {
                        "closed form".to_owned()
                    } else {
                        format!(
                            "{} iterations, {}",
                            r.iterations,
                            if r.converged {
                                "converged"
                            } else {
                                "NOT converged"
                            }
                        )
                    },
                ),
            ];
            egui::Grid::new("model-quality")
                .num_columns(2)
                .striped(true)
                .show(ui, |ui| {
                    for (k, v) in rows {
                        ui.label(k);
                        ui.label(v);
                        ui.end_row();
                    }
                });
            wrapped(
                ui,
                RichText::new(format!("background {}", r.background))
                    .small()
                    .weak(),
            );
        });
    egui::CollapsingHeader::new("Parameters")
        .default_open(true)
        .show(ui, |ui| {
            params_grid_ui(ui, "model-params", &r.params);
            let fitted = r.correlations.len();
            if fitted >= 2 {
                let mut worst = 0.0_f64;
                let mut pair = (0, 1);
                for (i, row) in r.correlations.iter().enumerate() {
                    for (j, c) in row.iter().enumerate().skip(i + 1) {
                        if c.abs() > worst.abs() {
                            worst = *c;
                            pair = (i, j);
                        }
                    }
                }
                if let (Some(a), Some(b)) = (r.params.get(pair.0), r.params.get(pair.1)) {
                    ui.label(format!(
                        "strongest correlation: r({}, {}) = {worst:.5}",
                        a.symbol, b.symbol
                    ));
                }
            }
        });
    egui::CollapsingHeader::new("Equation and validity")
        .default_open(false)
        .show(ui, |ui| {
            wrapped(ui, RichText::new(r.equation).monospace());
            wrapped(ui, RichText::new(r.source).small().weak());
            wrapped(ui, format!("Holds for: {}", r.validity));
            wrapped(
                ui,
                format!(
                    "{}: {}",
                    if r.in_validity_range {
                        "In range"
                    } else {
                        "Out of range"
                    },
                    r.validity_check
                ),
            );
        });
}

/// The parameters, one block each (the symbol and name, then the value ± standard error and
/// the 95 % interval, wrapped), so long values never widen the Result panel over the plots.
fn params_grid_ui(ui: &mut egui::Ui, id: &str, params: &[diffusor_fit::planar::Param]) {
    ui.push_id(id, |ui| {
        for p in params {
            ui.add_space(2.0);
            wrapped(
                ui,
                RichText::new(format!("{} — {}", p.symbol, p.name)).strong(),
            );
            wrapped(
                ui,
                format!(
                    "{} ± {}; 95 % interval {} … {}",
                    in_trade_units(p.estimate.value, p.unit),
                    in_trade_units(p.estimate.std_error, p.unit),
                    in_trade_units(p.estimate.ci95[0], p.unit),
                    in_trade_units(p.estimate.ci95[1], p.unit)
                ),
            );
        }
    });
}

fn details_ui(ui: &mut egui::Ui, r: &PlanarResult) {
    egui::CollapsingHeader::new("Fit quality and residual tests")
        .default_open(true)
        .show(ui, |ui| {
            let d = &r.diagnostics;
            egui::Grid::new("quality")
                .num_columns(2)
                .striped(true)
                .show(ui, |ui| {
                    let rows = [
                        ("R²", format!("{:.6}", d.r2)),
                        (
                            "residual SD",
                            diffusor_trace::format_si(d.residual_sd_a, "A", 3),
                        ),
                        ("Durbin–Watson", format!("{:.2}", d.durbin_watson)),
                        (
                            "lag-1 autocorrelation",
                            format!("{:.2}", d.lag1_autocorrelation),
                        ),
                        ("runs test z", format!("{:.1}", d.runs_z)),
                        ("effective points", format!("{:.0}", d.effective_points)),
                        ("degrees of freedom", format!("{:.0}", d.degrees_of_freedom)),
                        ("SE widened by", format!("× {:.2}", d.se_inflation)),
                    ];
                    for (k, v) in rows {
                        ui.label(k);
                        ui.label(v);
                        ui.end_row();
                    }
                });
            wrapped(ui, RichText::new(&d.autocorrelation_method).small().weak());
            wrapped(
                ui,
                RichText::new(format!(
                    "{}; {}; background {}",
                    d.regressor, d.weighting, r.background
                ))
                .small()
                .weak(),
            );
        });
    egui::CollapsingHeader::new("Parameters")
        .default_open(false)
        .show(ui, |ui| {
            params_grid_ui(ui, "params", &r.params);
            if let Some(c) = &r.charging {
                ui.label(format!(
                    "charging time constant τ = {}{}",
                    format::time(c.tau_s),
                    if c.fitted {
                        format!(" (fitted on the first {} points)", c.points)
                    } else {
                        " (entered)".to_owned()
                    }
                ));
            }
            wrapped(
                ui,
                RichText::new(format!("{} — {}", r.equation, r.source))
                    .small()
                    .weak(),
            );
        });
    if let Some(b) = &r.budget {
        egui::CollapsingHeader::new("Uncertainty budget")
            .default_open(true)
            .show(ui, |ui| {
                egui::Grid::new("budget")
                    .num_columns(3)
                    .striped(true)
                    .show(ui, |ui| {
                        ui.strong("input");
                        ui.strong("u (relative)");
                        ui.strong("share of u²");
                        ui.end_row();
                        for e in &b.entries {
                            ui.label(e.input).on_hover_text(format!(
                                "{} ± {}",
                                in_trade_units(e.value, e.unit),
                                in_trade_units(e.standard_uncertainty, e.unit)
                            ));
                            ui.label(percent(100.0 * e.standard_uncertainty / e.value.abs()));
                            ui.label(percent(e.share_percent));
                            ui.end_row();
                        }
                    });
                ui.label(format!(
                    "u_c = {}, U = {} (k = {})",
                    in_trade_units(b.combined_standard_uncertainty, b.unit),
                    in_trade_units(b.expanded_uncertainty, b.unit),
                    b.coverage_factor
                ));
                wrapped(ui, RichText::new(b.note).small().weak());
            });
    }
    if let Some(s) = &r.sensitivity {
        egui::CollapsingHeader::new("Window sensitivity")
            .default_open(true)
            .show(ui, |ui| sensitivity_ui(ui, r, s));
    }
    egui::CollapsingHeader::new("Plateau check")
        .default_open(false)
        .show(ui, |ui| {
            wrapped(ui, RichText::new(&r.plateau.criterion).small());
            match r.plateau.rises_from_s {
                Some(t) => ui.label(format!(
                    "I·√t rises above its plateau from {}",
                    format::time(t)
                )),
                None => ui.label("I·√t stays on its plateau: no convection detected"),
            };
        });
}

fn sensitivity_ui(ui: &mut egui::Ui, r: &PlanarResult, s: &Sensitivity) {
    let (factor, unit) = match s.quantity {
        "D" => (1e4, "cm²/s"),
        "nAC" => (1e-2, "mol/cm"),
        _ => (1.0, "A·s^½"),
    };
    let current = planar_headline(r).map(|h| h.1.value * factor);
    let reference = current
        .or_else(|| s.lower.first().map(|p| p.value * factor))
        .unwrap_or(1.0);
    let e = reference.abs().log10().floor() as i32;
    let (scale, label) = if s.quantity == "slope" {
        let (f, u) = prefixed(reference.abs(), "A·s^½");
        (f, format!("S / {u}"))
    } else {
        (
            10f64.powi(e),
            format!(
                "{} / 10{} {unit}",
                if s.quantity == "D" { "D" } else { "n·A·C" },
                format::superscript(e)
            ),
        )
    };
    wrapped(
        ui,
        RichText::new("The result as one bound moves and the other stays: a flat stretch around the chosen bound means the result does not hinge on it.")
            .small()
            .weak(),
    );
    let series = |points: &[diffusor_fit::planar::SensitivityPoint]| -> Vec<[f64; 3]> {
        points
            .iter()
            .map(|p| {
                [
                    Scale::Log.to_plot(p.bound_s),
                    p.value * factor / scale,
                    p.std_error * factor / scale,
                ]
            })
            .collect()
    };
    let ink = ui.visuals().strong_text_color();
    let (c_lo, c_hi) = (
        Color32::from_rgb(0x00, 0x72, 0xB2),
        Color32::from_rgb(0xD5, 0x5E, 0x00),
    );
    ui.horizontal_wrapped(|ui| {
        ui.label(RichText::new("● start moved (end fixed)").color(c_lo));
        ui.label(RichText::new("● end moved (start fixed)").color(c_hi));
        ui.weak("— line and band: the result and its 95 % interval; dashed: the chosen bounds");
    });
    let lower = series(&s.lower);
    let upper = series(&s.upper);
    log_time_axis(Plot::new("sensitivity"))
        .x_axis_label("bound moved, t (log scale)")
        .y_axis_label(label)
        .y_axis_formatter(|m, _: &RangeInclusive<f64>| plain(m.value, 5))
        .height(190.0)
        // It sits in a scrolling panel: the wheel scrolls the panel, not the plot.
        .allow_scroll(false)
        .allow_zoom(false)
        .allow_drag(false)
        .allow_boxed_zoom(false)
        .show(ui, |plot_ui| {
            if let Some(d) = planar_headline(r) {
                let e = d.1;
                plot_ui.span(
                    Span::new(
                        "95 % interval of the result",
                        e.ci95[0] * factor / scale..=e.ci95[1] * factor / scale,
                    )
                    .axis(egui_plot::Axis::Y)
                    .fill(ink.gamma_multiply(0.12))
                    .border_width(0.0),
                );
                plot_ui.hline(
                    HLine::new("result", e.value * factor / scale)
                        .color(ink)
                        .width(1.0),
                );
            }
            for (name, pts, colour) in [
                ("start moved (end fixed)", &lower, c_lo),
                ("end moved (start fixed)", &upper, c_hi),
            ] {
                for p in pts {
                    plot_ui.line(
                        Line::new(name, vec![[p[0], p[1] - p[2]], [p[0], p[1] + p[2]]])
                            .color(colour)
                            .width(1.0),
                    );
                }
                plot_ui.line(
                    Line::new(name, pts.iter().map(|p| [p[0], p[1]]).collect::<Vec<_>>())
                        .color(colour)
                        .width(1.5),
                );
                plot_ui.points(
                    Points::new(name, pts.iter().map(|p| [p[0], p[1]]).collect::<Vec<_>>())
                        .color(colour)
                        .radius(2.5)
                        .shape(MarkerShape::Circle)
                        .filled(true),
                );
            }
            for t in [r.window.lo.time_s, r.window.hi.time_s] {
                plot_ui.vline(
                    VLine::new("chosen bound", Scale::Log.to_plot(t))
                        .color(ink.gamma_multiply(0.6))
                        .style(egui_plot::LineStyle::dashed_dense()),
                );
            }
        });
    wrapped(ui, RichText::new(&s.note).small().weak());
}
