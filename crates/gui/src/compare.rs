//! The "Replicates" view: the selected runs side by side, what they say together (from
//! [`diffusor_fit::replicates::summarize`]) and their transients normalised by each run's own
//! fit, so runs of different size can be laid over one another.

use diffusor_fit::replicates::{GrubbsOutcome, ReplicateSummary, RunEstimate, summarize};
use eframe::egui::{self, Color32, RichText};
use egui_plot::{HLine, Legend, Line, Plot};

use crate::format::{percent, sci, sci_interval};
use crate::plots::{Scale, log_time_axis, time_series, window_range};
use crate::runs::Run;

/// The comparison's view state.
#[derive(Debug, Clone, Default)]
pub struct ComparePanel {}

/// The quantity the runs are compared on: D in forward mode, n·A·C when any run used a known
/// D. Its name, SI-to-shown factor and unit.
fn target(runs: &[&Run]) -> (&'static str, f64, &'static str) {
    let inverse = runs
        .iter()
        .filter_map(|r| r.fit_view())
        .any(|f| f.result.mode == "inverse");
    if inverse {
        ("n·A·C", 1e-2, "mol/cm")
    } else {
        ("D", 1e4, "cm²/s")
    }
}

fn value_of(run: &Run, name: &str) -> Option<diffusor_fit::planar::Estimate> {
    let r = &run.fit_view()?.result;
    if name == "D" {
        r.diffusion_m2_s
    } else {
        r.nac_mol_m
    }
}

fn wrapped(ui: &mut egui::Ui, text: impl Into<RichText>) {
    ui.add(egui::Label::new(text.into()).wrap());
}

impl ComparePanel {
    /// Draws the comparison of the selected runs.
    pub fn ui(&mut self, ui: &mut egui::Ui, runs: &[Run]) {
        let chosen: Vec<&Run> = runs.iter().filter(|r| r.selected).collect();
        ui.heading("Replicate comparison");
        if chosen.len() < 2 {
            ui.label("Tick two or more runs in the list to compare them as replicates.");
            return;
        }
        let (name, factor, unit) = target(&chosen);
        let estimates: Vec<RunEstimate> = chosen
            .iter()
            .filter_map(|r| {
                // In the unit shown, so that the engine's sentences quote the table's numbers.
                value_of(r, name).map(|e| RunEstimate {
                    label: r.name.clone(),
                    value: e.value * factor,
                    std_error: e.std_error * factor,
                })
            })
            .collect();
        let summary = summarize(&estimates);
        let suspect = match &summary {
            Ok(s) => match &s.grubbs {
                GrubbsOutcome::Tested(g) if g.outlier => Some(g.suspect_label.clone()),
                _ => None,
            },
            Err(_) => None,
        };
        egui::Grid::new("replicate-table")
            .num_columns(6)
            .striped(true)
            .spacing([16.0, 4.0])
            .show(ui, |ui| {
                table_ui(ui, &chosen, (name, factor, unit), suspect.as_deref());
            });
        ui.add_space(8.0);
        match &summary {
            Ok(s) => {
                summary_ui(ui, s, unit);
                ui.add_space(4.0);
                verdicts_ui(ui, s);
            }
            Err(e) => {
                ui.colored_label(ui.visuals().warn_fg_color, format!("No summary: {e}"));
            }
        }
        ui.separator();
        overlay_ui(ui, &chosen);
    }
}

/// One row per run; `target` is the quantity's name, SI-to-shown factor and unit.
fn table_ui(
    ui: &mut egui::Ui,
    chosen: &[&Run],
    (name, factor, unit): (&str, f64, &str),
    suspect: Option<&str>,
) {
    ui.strong("run");
    ui.strong(format!("{name} / {unit}"));
    ui.strong("standard error");
    ui.strong("95 % interval");
    ui.strong("window");
    ui.strong("");
    ui.end_row();
    for run in chosen {
        ui.horizontal(|ui| {
            let (rect, _) = ui.allocate_exact_size(egui::vec2(12.0, 12.0), egui::Sense::hover());
            ui.painter().rect_filled(rect, 2.0, run.colour);
            ui.label(&run.name);
        });
        match (value_of(run, name), run.fit_view()) {
            (Some(e), Some(f)) => {
                ui.label(sci(e.value * factor, 4));
                ui.label(sci(e.std_error * factor, 2));
                ui.label(sci_interval(e.ci95[0] * factor, e.ci95[1] * factor, 4));
                let w = &f.result.window;
                ui.label(format!(
                    "{} – {}",
                    crate::format::time(w.lo.time_s),
                    crate::format::time(w.hi.time_s)
                ));
                if suspect == Some(run.name.as_str()) {
                    ui.colored_label(ui.visuals().warn_fg_color, "▲ outlier (Grubbs)");
                } else {
                    ui.label("");
                }
            }
            _ => {
                let why = run
                    .error()
                    .map_or_else(|| format!("no {name} yet"), str::to_owned);
                ui.colored_label(ui.visuals().weak_text_color(), why);
                for _ in 0..4 {
                    ui.label("");
                }
            }
        }
        ui.end_row();
    }
}

/// A p-value as people read it: three digits, or a bound when it underflows the display.
fn p_value(p: f64) -> String {
    if p < 1e-4 {
        "p < 0.0001".to_owned()
    } else {
        format!("p = {p:.4}")
    }
}

/// The statistics in pairs of columns; values are already in `unit`.
fn summary_ui(ui: &mut egui::Ui, s: &ReplicateSummary, unit: &str) {
    let mut cells: Vec<(&str, String)> = vec![
        ("runs", s.n.to_string()),
        ("mean", format!("{} {unit}", sci(s.mean, 4))),
        ("standard deviation", format!("{} {unit}", sci(s.sd, 2))),
        (
            "relative SD",
            s.rsd_percent.map_or_else(|| "—".to_owned(), percent),
        ),
        (
            "standard error of the mean",
            format!("{} {unit}", sci(s.sem, 2)),
        ),
        (
            "95 % interval of the mean",
            format!("{} {unit}", sci_interval(s.ci95.lower, s.ci95.upper, 4)),
        ),
    ];
    if let Some(w) = &s.weighted {
        cells.push((
            "weighted mean",
            format!(
                "{} ± {} {unit}",
                sci(w.mean, 4),
                sci(w.internal_std_error, 2)
            ),
        ));
        cells.push(("Birge ratio", format!("{:.2}", w.birge_ratio)));
        cells.push((
            "chi-squared / degrees of freedom",
            format!("{:.1} / {} ({})", w.chi_squared, w.dof, p_value(w.p_value)),
        ));
        if let Some(ext) = w.external_std_error {
            cells.push(("external standard error", format!("{} {unit}", sci(ext, 2))));
        }
    }
    if let Some(f) = &s.fit_vs_scatter {
        cells.push((
            "scatter ÷ fit uncertainty",
            format!("{:.1}", f.scatter_to_fit_ratio),
        ));
    }
    egui::Grid::new("replicate-summary")
        .num_columns(4)
        .striped(true)
        .spacing([16.0, 4.0])
        .show(ui, |ui| {
            for pair in cells.chunks(2) {
                for (k, v) in pair {
                    ui.label(*k);
                    ui.strong(v);
                }
                ui.end_row();
            }
        });
    ui.weak(format!(
        "The interval of the mean uses Student's t = {:.3} on {} degrees of freedom; the weighted mean's ± is its internal standard error.",
        s.ci95.t_critical, s.ci95.dof
    ));
}

/// The engine's verdicts in words, and what the statistics leave out.
fn verdicts_ui(ui: &mut egui::Ui, s: &ReplicateSummary) {
    if let Some(w) = &s.weighted {
        let colour = if w.consistent {
            ui.visuals().text_color()
        } else {
            ui.visuals().warn_fg_color
        };
        wrapped(ui, RichText::new(&w.statement).color(colour));
    }
    if let Some(o) = &s.weighted_omitted {
        wrapped(ui, RichText::new(&o.reason).weak());
    }
    match &s.grubbs {
        GrubbsOutcome::Tested(g) => {
            let colour = if g.outlier {
                ui.visuals().warn_fg_color
            } else {
                ui.visuals().text_color()
            };
            wrapped(ui, RichText::new(&g.statement).color(colour));
        }
        GrubbsOutcome::NotApplicable { reason } => wrapped(ui, RichText::new(reason).weak()),
    }
    ui.add_space(4.0);
    wrapped(
        ui,
        RichText::new("Each run's standard error is its fit's own: the area and concentration are common to the runs, and their uncertainty is not in these statistics (see each run's U in the fit view). Validate against a standard of known D before relying on the mean.")
            .small()
            .weak(),
    );
}

fn overlay_ui(ui: &mut egui::Ui, chosen: &[&Run]) {
    ui.strong("Normalised transients: (I − b)·√(t − t0) / S against log t");
    ui.weak("Each run divided by its own fit: 1 where it follows the Cottrell law; bold inside its window.");
    let ink = ui.visuals().strong_text_color();
    log_time_axis(Plot::new("overlay"))
        .y_axis_label("(I − b)·√(t − t0) / S")
        .legend(Legend::default().position(egui_plot::Corner::RightBottom))
        // Departures from the law matter at the per-cent level: frame ±10 % around 1 (a
        // double-click returns here; zoom out to see the charging spike).
        .default_y_bounds(0.9, 1.1)
        .show(ui, |plot_ui| {
            plot_ui.hline(HLine::new("Cottrell law", 1.0).color(ink).width(1.0));
            for run in chosen {
                let (Some(data), Some(fit)) = (run.data(), run.fit_view()) else {
                    continue;
                };
                let w = window_range(data, fit);
                let n = data.time_s.len();
                let faint: Color32 = run.colour.gamma_multiply(0.45);
                for (range, colour, width) in [
                    (0..w.start, faint, 1.0),
                    (w.clone(), run.colour, 1.5),
                    (w.end..n, faint, 1.0),
                ] {
                    if range.is_empty() {
                        continue;
                    }
                    let pts = time_series(
                        plot_ui,
                        &data.time_s,
                        range,
                        Scale::Log,
                        |i| fit.normalised[i],
                        Some((&fit.normalised, &fit.normalised_pyramid)),
                    );
                    plot_ui.line(Line::new(run.name.clone(), pts).color(colour).width(width));
                }
            }
        });
}
