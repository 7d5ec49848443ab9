//! The "Result" panel: the focused run's D (or n·A·C and area) with its standard error, 95 %
//! interval and expanded uncertainty, the window as typed and why its bounds sit where they
//! do, fit quality and residual tests, the parameters, the uncertainty budget, the
//! window-sensitivity curves and the engine's warnings. Every number is the engine's; this
//! module only chooses units and words.

use std::ops::RangeInclusive;

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
}

/// The "Result" panel's view state (the collapsible sections keep their own).
#[derive(Debug, Clone, Default)]
pub struct ResultPanel {}

/// The caution shown with every result.
pub const CAUTION: &str = "D follows from the area, concentration and n you entered: check them. Validate the method against a standard of known D before using results for decisions, and follow your local safety rules and the reagents' safety data sheets.";

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
        _ => format!("{} {unit}", sci(value, 4)),
    }
}

/// The headline quantity of a result: its name, the estimate, the factor from SI to the unit
/// shown and that unit.
fn headline(r: &PlanarResult) -> Option<(&'static str, Estimate, f64, &'static str)> {
    if let Some(d) = r.diffusion_m2_s {
        return Some(("D", d, 1e4, "cm²/s"));
    }
    if let Some(a) = r.area_m2 {
        return Some(("A (electroactive)", a, 1e4, "cm²"));
    }
    r.nac_mol_m.map(|e| ("n·A·C", e, 1e-2, "mol/cm"))
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
            Import::Loading => {
                ui.horizontal(|ui| {
                    ui.spinner();
                    ui.label("reading the file…");
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
                action = window_ui(ui, run, None);
            }
            Some(Ok(fit)) => {
                let r = &fit.result;
                ui.add_space(4.0);
                match headline(r) {
                    Some((name, e, factor, unit)) => {
                        estimate_lines_ui(ui, name, e, factor, unit);
                        if let Some(b) = &r.budget {
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
                    None => {
                        ui.label("Only the Cottrell slope was fitted: enter the area and the concentration for D, or a known D for n·A·C.");
                    }
                }
                wrapped(
                    ui,
                    RichText::new("The standard error and 95 % interval are the fit's own (widened for correlated residuals); U adds the uncertainties of A and C.")
                        .small()
                        .weak(),
                );
                wrapped(ui, RichText::new(CAUTION).small().weak());
                ui.separator();
                action = window_ui(ui, run, Some(r));
                ui.separator();
                warnings_ui(ui, r);
                details_ui(ui, r);
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

fn window_ui(ui: &mut egui::Ui, run: &mut Run, r: Option<&PlanarResult>) -> Option<ResultAction> {
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
    if let Some(r) = r {
        let w = &r.window;
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

fn warnings_ui(ui: &mut egui::Ui, r: &PlanarResult) {
    if r.warnings.is_empty() {
        ui.label("No warnings from the fit.");
        return;
    }
    ui.strong(format!("Warnings ({})", r.warnings.len()));
    for w in &r.warnings {
        ui.horizontal_top(|ui| {
            ui.colored_label(warn_colour(ui), "▲");
            wrapped(ui, w.message.as_str());
        });
    }
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
            egui::Grid::new("params")
                .num_columns(3)
                .striped(true)
                .show(ui, |ui| {
                    ui.strong("");
                    ui.strong("value");
                    ui.strong("95 % interval");
                    ui.end_row();
                    for p in &r.params {
                        ui.label(format!("{} ({})", p.symbol, p.name));
                        ui.label(format!(
                            "{} ± {}",
                            in_trade_units(p.estimate.value, p.unit),
                            in_trade_units(p.estimate.std_error, p.unit)
                        ));
                        ui.label(format!(
                            "{} … {}",
                            in_trade_units(p.estimate.ci95[0], p.unit),
                            in_trade_units(p.estimate.ci95[1], p.unit)
                        ));
                        ui.end_row();
                    }
                });
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
    let current = headline(r).map(|h| h.1.value * factor);
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
            if let Some(d) = headline(r) {
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
