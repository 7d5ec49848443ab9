//! The four plots of a fit, linked in time: the transient I(t), the Cottrell plot I against
//! (t − t0)^-½, the residuals, and I·√t on a log-time axis. Excluded parts of the transient are
//! shaded; the window's bounds can be dragged on the transient.

use std::ops::RangeInclusive;

use eframe::egui::{self, Color32, Id, Stroke, Vec2b};
use egui_plot::{
    AxisHints, GridInput, GridMark, HLine, Line, LineStyle, MarkerShape, Plot, PlotBounds,
    PlotPoint, PlotUi, Points, Span, VLine,
};
use serde::{Deserialize, Serialize};

use crate::decimate::{Pyramid, envelope, envelope_fast, index_range};
use crate::runs::{FitView, Run, RunData, RunId};

/// Linear or logarithmic axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
pub enum Scale {
    /// Linear.
    Linear,
    /// Base-10 logarithmic.
    #[default]
    Log,
}

impl Scale {
    /// Data value to plot coordinate (NaN for a non-positive value on a log axis).
    pub fn to_plot(self, v: f64) -> f64 {
        match self {
            Scale::Linear => v,
            Scale::Log if v > 0.0 => v.log10(),
            Scale::Log => f64::NAN,
        }
    }

    /// Plot coordinate back to a data value.
    pub fn from_plot(self, x: f64) -> f64 {
        match self {
            Scale::Linear => x,
            Scale::Log => 10f64.powf(x),
        }
    }
}

/// Axis choices the window remembers between starts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(default)]
pub struct PlotPrefs {
    /// The time axis of the transient and the residuals.
    pub time: Scale,
    /// The current axis of the transient.
    pub current: Scale,
}

/// Width of every plot's y tick labels, in points, so that plots stacked in a column share
/// their time axis on screen as well as in value.
const Y_AXIS_WIDTH: f32 = 64.0;

/// Which bound of the window.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Which {
    /// The lower bound.
    Lo,
    /// The upper bound.
    Hi,
}

/// A bound dropped at a new place on the transient.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BoundDrag {
    /// The run.
    pub id: RunId,
    /// Which bound.
    pub which: Which,
    /// Where, in s after the step.
    pub time_s: f64,
}

/// The view state of the plots.
#[derive(Debug, Clone, Default)]
pub struct PlotsPanel {
    /// Axis choices.
    pub prefs: PlotPrefs,
    /// The bound under the pointer in the last frame.
    hover: Option<Which>,
    /// The bound being dragged and where it is now, in s.
    drag: Option<(Which, f64)>,
    /// The fit the residual and Cottrell views were last fitted to, so they re-frame when it
    /// changes.
    framed: Option<(RunId, u64)>,
    /// How the transient mapped data to the screen in the last frame.
    transient: Option<egui_plot::PlotTransform>,
}

/// A power-of-thousand prefix for values of typical size `magnitude`: the factor to divide by
/// and the unit with its prefix.
pub fn prefixed(magnitude: f64, unit: &str) -> (f64, String) {
    const PREFIXES: [(i32, &str); 6] = [
        (-15, "f"),
        (-12, "p"),
        (-9, "n"),
        (-6, "µ"),
        (-3, "m"),
        (0, ""),
    ];
    if !(magnitude > 0.0 && magnitude.is_finite()) {
        return (1.0, unit.to_owned());
    }
    let e = ((magnitude.log10() / 3.0).floor() as i32 * 3).clamp(-15, 0);
    let p = PREFIXES
        .iter()
        .find(|(x, _)| *x == e)
        .map_or("", |(_, p)| p);
    (10f64.powi(e), format!("{p}{unit}"))
}

/// Grid marks for a log₁₀ axis: every decade, and 2…9 within each decade when few decades
/// are visible. When decades are too close for a label each (`100 µs` needs about 45 points),
/// only every second or third decade is a labelled mark; the others stay as plain grid lines.
pub fn log_marks(input: &GridInput) -> Vec<GridMark> {
    let (lo, hi) = input.bounds;
    if !(hi > lo && lo.is_finite() && hi.is_finite()) || hi - lo > 60.0 {
        return Vec::new();
    }
    // `base_step_size` is the plot length of egui_plot's smallest grid spacing, 8 points.
    let points_per_decade = 8.0 / input.base_step_size.max(f64::MIN_POSITIVE);
    let step = if points_per_decade >= 45.0 && hi - lo <= 12.0 {
        1
    } else if points_per_decade >= 23.0 {
        2
    } else {
        3
    };
    let mut marks = Vec::new();
    for d in (lo.floor() as i32)..=(hi.ceil() as i32) {
        if f64::from(d) >= lo && f64::from(d) <= hi {
            // A decade between labelled ones gets a step too small for a label.
            let labelled = d.rem_euclid(step) == 0;
            marks.push(GridMark {
                value: f64::from(d),
                step_size: if labelled { f64::from(step) } else { 0.5 },
            });
        }
        if hi - lo < 8.0 {
            for m in 2..=9 {
                let v = f64::from(d) + f64::from(m).log10();
                if v >= lo && v <= hi {
                    marks.push(GridMark {
                        value: v,
                        step_size: 0.1,
                    });
                }
            }
        }
    }
    marks
}

/// A tick label on a log₁₀ axis of `unit`: `10 ms`, `2 µA`.
pub fn log_label(mark: GridMark, unit: &str) -> String {
    diffusor_trace::format_si(10f64.powf(mark.value), unit, 1)
}

/// A plot with a log₁₀ x axis of time. Decade labels (`10 ms`) are short, so they may stand
/// closer than egui_plot's default spacing, which is sized for long numbers.
pub fn log_time_axis(plot: Plot<'_>) -> Plot<'_> {
    plot.x_grid_spacer(|i| log_marks(&i)).custom_x_axes(vec![
        AxisHints::new_x()
            .label("t after the step (log scale)")
            .formatter(|m, _: &RangeInclusive<f64>| log_label(m, "s"))
            .label_spacing(32.0..=48.0),
    ])
}

/// The visible x range of a plot when the user has zoomed or panned, else `None` (the whole
/// data are in view).
pub fn zoomed_x(plot_ui: &PlotUi<'_>) -> Option<(f64, f64)> {
    let b: PlotBounds = plot_ui.plot_bounds();
    (!plot_ui.auto_bounds().x && b.is_valid_x()).then(|| (b.min()[0], b.max()[0]))
}

/// Pixel columns across the plot, for the envelope.
pub fn columns(plot_ui: &PlotUi<'_>) -> usize {
    (plot_ui.transform().frame().width().max(100.0) as usize).min(4000)
}

/// The samples of a time series in view, decimated: `x` is `scale` of time (increasing), `y`
/// any value per sample. `range` limits the samples considered (the window, say). With `fast`
/// (the raw series `y` increases with, and its pyramid) the frame costs a few thousand
/// look-ups instead of a pass over every sample in view.
pub fn time_series(
    plot_ui: &PlotUi<'_>,
    time_s: &[f64],
    range: std::ops::Range<usize>,
    scale: Scale,
    y: impl Fn(usize) -> f64,
    fast: Option<(&[f64], &Pyramid)>,
) -> Vec<[f64; 2]> {
    let visible = zoomed_x(plot_ui);
    series_in_view(time_s, range, scale, visible, columns(plot_ui), y, fast)
}

/// What [`time_series`] draws, for a view showing `visible` (plot coordinates; `None`: all of
/// `range`) across `cols` pixel columns. Public for the frame benchmark.
pub fn series_in_view(
    time_s: &[f64],
    range: std::ops::Range<usize>,
    scale: Scale,
    visible: Option<(f64, f64)>,
    cols: usize,
    y: impl Fn(usize) -> f64,
    fast: Option<(&[f64], &Pyramid)>,
) -> Vec<[f64; 2]> {
    let full = (
        time_s.get(range.start).copied().unwrap_or(f64::NAN),
        time_s
            .get(range.end.saturating_sub(1))
            .copied()
            .unwrap_or(f64::NAN),
    );
    let (indices, x_lo, x_hi) = match visible {
        Some((a, b)) => {
            let r = index_range(time_s, scale.from_plot(a), scale.from_plot(b));
            (r.start.max(range.start)..r.end.min(range.end), a, b)
        }
        None => (range, scale.to_plot(full.0), scale.to_plot(full.1)),
    };
    let indices = indices.start..indices.end.max(indices.start);
    let x = |i: usize| scale.to_plot(time_s[i]);
    match fast {
        Some(raw) => envelope_fast(indices, x, raw, y, x_lo, x_hi, cols),
        None => envelope(indices, x, y, x_lo, x_hi, cols),
    }
}

/// The colour for a run's data: its own, faded when it is not the one in focus.
fn data_colour(run: &Run, focused: bool) -> Color32 {
    if focused {
        run.colour
    } else {
        run.colour.gamma_multiply(0.55)
    }
}

/// The colour of fitted lines and bounds: the text colour, which contrasts with both themes.
fn ink(ui: &egui::Ui) -> Color32 {
    ui.visuals().strong_text_color()
}

fn shade(ui: &egui::Ui) -> Color32 {
    if ui.visuals().dark_mode {
        Color32::from_white_alpha(34)
    } else {
        Color32::from_black_alpha(20)
    }
}

/// Shades what lies outside `lo..hi` (plot coordinates).
pub fn shade_outside(plot_ui: &mut PlotUi<'_>, fill: Color32, lo: f64, hi: f64) {
    if lo.is_finite() {
        plot_ui.span(
            Span::new("", f64::NEG_INFINITY..=lo)
                .fill(fill)
                .border_width(0.0),
        );
    }
    if hi.is_finite() {
        plot_ui.span(
            Span::new("", hi..=f64::INFINITY)
                .fill(fill)
                .border_width(0.0),
        );
    }
}

/// `n` times spread evenly in log between `a` and `b`.
pub fn log_spaced(a: f64, b: f64, n: usize) -> Vec<f64> {
    if !(a > 0.0 && b > a) || n < 2 {
        return Vec::new();
    }
    let (la, lb) = (a.ln(), b.ln());
    (0..n)
        .map(|k| (la + (lb - la) * k as f64 / (n - 1) as f64).exp())
        .collect()
}

/// The window's sample range of a fitted run.
pub fn window_range(data: &RunData, fit: &FitView) -> std::ops::Range<usize> {
    let w = &fit.result.window;
    let a = data.time_s.partition_point(|&t| t < w.lo.time_s);
    let b = data.time_s.partition_point(|&t| t <= w.hi.time_s);
    a..b.max(a)
}

/// What the plots are given.
#[derive(Debug)]
pub struct PlotInput<'a> {
    /// Every run.
    pub runs: &'a [Run],
    /// The run in focus.
    pub focus: Option<RunId>,
}

impl PlotsPanel {
    /// Where a time `t_s` after the step was drawn on the transient in the last frame, as a
    /// point on the screen halfway up the plot (for tests and tools that drive the window).
    pub fn transient_point(&self, t_s: f64) -> Option<egui::Pos2> {
        let tr = self.transient.as_ref()?;
        let x = tr.position_from_point_x(self.prefs.time.to_plot(t_s));
        Some(egui::pos2(x, tr.frame().center().y))
    }

    /// The time after the step at screen abscissa `x` on the transient, in s.
    pub fn transient_time_at(&self, x: f32) -> Option<f64> {
        let tr = self.transient.as_ref()?;
        let p = tr.value_from_position(egui::pos2(x, tr.frame().center().y));
        Some(self.prefs.time.from_plot(p.x))
    }

    /// Draws the axis choices and the four plots; returns a bound the user dropped on the
    /// transient.
    pub fn ui(&mut self, ui: &mut egui::Ui, input: &PlotInput<'_>) -> Option<BoundDrag> {
        ui.horizontal_wrapped(|ui| {
            ui.label("Time");
            ui.selectable_value(&mut self.prefs.time, Scale::Log, "log");
            ui.selectable_value(&mut self.prefs.time, Scale::Linear, "linear");
            ui.separator();
            ui.label("Current");
            ui.selectable_value(&mut self.prefs.current, Scale::Log, "log");
            ui.selectable_value(&mut self.prefs.current, Scale::Linear, "linear");
        });
        let focused = input
            .focus
            .and_then(|id| input.runs.iter().find(|r| r.id == id));
        let fit_key = focused.and_then(|r| r.fit_view().map(|_| (r.id, r.fit.latest_generation)));
        let reframe = fit_key.is_some() && fit_key != self.framed;
        if reframe {
            self.framed = fit_key;
        }
        let mut dropped = None;
        let gap = ui.spacing().item_spacing.y;
        let half = ((ui.available_height() - gap) / 2.0).max(120.0);
        ui.columns(2, |cols| {
            cols[0].allocate_ui(egui::vec2(cols[0].available_width(), half), |ui| {
                dropped = self.transient_ui(ui, input, focused);
            });
            cols[1].allocate_ui(egui::vec2(cols[1].available_width(), half), |ui| {
                cottrell_ui(ui, input, focused, reframe);
            });
        });
        ui.columns(2, |cols| {
            let h = cols[0].available_height();
            cols[0].allocate_ui(egui::vec2(cols[0].available_width(), h), |ui| {
                self.residuals_ui(ui, focused, reframe);
            });
            cols[1].allocate_ui(egui::vec2(cols[1].available_width(), h), |ui| {
                plateau_ui(ui, input, focused, self.prefs.time == Scale::Log, reframe);
            });
        });
        dropped
    }

    fn time_link(&self) -> Id {
        match self.prefs.time {
            Scale::Log => Id::unique("time-axis-log"),
            Scale::Linear => Id::unique("time-axis-linear"),
        }
    }

    fn time_axis<'a>(&self, plot: Plot<'a>) -> Plot<'a> {
        match self.prefs.time {
            Scale::Log => log_time_axis(plot),
            Scale::Linear => plot.x_axis_label("t after the step / s"),
        }
    }

    fn transient_ui(
        &mut self,
        ui: &mut egui::Ui,
        input: &PlotInput<'_>,
        focused: Option<&Run>,
    ) -> Option<BoundDrag> {
        let sign_note = focused
            .and_then(|r| r.data())
            .is_some_and(|d| d.sign_reversed);
        // Wrapped: the sign note must not widen the column past the plot beside it.
        ui.horizontal_wrapped(|ui| {
            ui.strong("Transient").on_hover_text(
                "Drag a window bound (a solid vertical line) to move it; the fit follows when you let go. Scroll to zoom, drag to pan, double-click to re-frame.",
            );
            if sign_note {
                ui.weak("cathodic: current shown with its sign reversed");
            }
        });
        let (time_scale, current_scale) = (self.prefs.time, self.prefs.current);
        // Current in the unit its size suggests on a linear axis; in A, labelled by prefix, on a
        // log axis.
        let magnitude = focused
            .and_then(|r| r.fit_view())
            .map(|f| f.result.predict_a(f.result.window.lo.time_s))
            .or_else(|| {
                focused
                    .and_then(|r| r.data())
                    .and_then(|d| d.current_a.last().copied())
            })
            .unwrap_or(1e-6)
            .abs();
        let (i_scale, i_unit) = prefixed(magnitude, "A");
        let mut plot = self
            .time_axis(Plot::new("transient").y_axis_min_width(Y_AXIS_WIDTH))
            .link_axis(self.time_link(), Vec2b::new(true, false))
            .link_cursor(self.time_link(), Vec2b::new(true, false))
            .allow_drag(self.hover.is_none() && self.drag.is_none());
        plot = match current_scale {
            Scale::Log => plot
                .y_grid_spacer(|i| log_marks(&i))
                .y_axis_formatter(|m, _: &RangeInclusive<f64>| log_label(m, "A"))
                .y_axis_label("I (log scale)"),
            Scale::Linear => plot.y_axis_label(format!("I / {i_unit}")),
        };
        let y_of = move |i: f64| match current_scale {
            Scale::Log => current_scale.to_plot(i),
            Scale::Linear => i / i_scale,
        };
        let ink = ink(ui);
        let fill = shade(ui);
        let focus_id = focused.map(|r| r.id);
        let window = focused.and_then(|r| r.fit_view()).map(|f| {
            (
                f.result.window.lo.time_s,
                f.result.window.hi.time_s,
                f.planar().and_then(|p| p.plateau.rises_from_s),
            )
        });
        let drag = self.drag;
        let mut hover = None;
        let mut new_drag = self.drag;
        let mut dropped = None;
        let shown = plot.show(ui, |plot_ui| {
            for run in ordered(input.runs, focus_id) {
                let Some(data) = run.data() else { continue };
                let is_focus = Some(run.id) == focus_id;
                let pts = time_series(
                    plot_ui,
                    &data.time_s,
                    0..data.time_s.len(),
                    time_scale,
                    |i| y_of(data.current_a[i]),
                    Some((&data.current_a, &data.current_pyramid)),
                );
                plot_ui.line(
                    Line::new(run.name.clone(), pts)
                        .color(data_colour(run, is_focus))
                        .width(if is_focus { 1.5 } else { 1.0 }),
                );
            }
            let (Some(run), Some((lo, hi, convection))) = (focused, window) else {
                return;
            };
            let (fit_lo, fit_hi) = (lo, hi);
            let lo = if let Some((Which::Lo, t)) = drag {
                t
            } else {
                lo
            };
            let hi = if let Some((Which::Hi, t)) = drag {
                t
            } else {
                hi
            };
            if let Some(fit) = run.fit_view() {
                let curve: Vec<[f64; 2]> = log_spaced(lo, hi, 200)
                    .into_iter()
                    .map(|t| [time_scale.to_plot(t), y_of(fit.result.predict_a(t))])
                    .collect();
                plot_ui.line(
                    Line::new("fitted model", curve)
                        .color(ink)
                        .width(2.0)
                        .style(LineStyle::dashed_loose()),
                );
            }
            shade_outside(
                plot_ui,
                fill,
                time_scale.to_plot(lo),
                time_scale.to_plot(hi),
            );
            if let Some(t) = convection {
                plot_ui.vline(
                    VLine::new("convection onset", time_scale.to_plot(t))
                        .color(Color32::from_rgb(0xD5, 0x5E, 0x00))
                        .style(LineStyle::dashed_dense()),
                );
            }
            // Dragging a bound: near its line the plot stops panning and the line follows the
            // pointer; on release the bound is handed back.
            let pointer = plot_ui.response().hover_pos();
            let screen_x = |t: f64| {
                plot_ui
                    .screen_from_plot(PlotPoint::new(time_scale.to_plot(t), 0.0))
                    .x
            };
            if let Some(p) = pointer {
                let (dl, dh) = ((p.x - screen_x(lo)).abs(), (p.x - screen_x(hi)).abs());
                if dl < 6.0 && dl <= dh {
                    hover = Some(Which::Lo);
                } else if dh < 6.0 {
                    hover = Some(Which::Hi);
                }
            }
            for (which, t) in [(Which::Lo, lo), (Which::Hi, hi)] {
                let active = hover == Some(which) || drag.is_some_and(|d| d.0 == which);
                plot_ui.vline(
                    VLine::new(
                        match which {
                            Which::Lo => "window start",
                            Which::Hi => "window end",
                        },
                        time_scale.to_plot(t),
                    )
                    .stroke(Stroke::new(if active { 3.0 } else { 1.5 }, ink)),
                );
            }
            // The grab starts on the press (egui's drag only starts once the pointer has moved,
            // by which time it may have left the line) and ends on the release.
            let (pressed, down, released) = plot_ui.ctx().input(|i| {
                (
                    i.pointer.primary_pressed(),
                    i.pointer.primary_down(),
                    i.pointer.primary_released(),
                )
            });
            if pressed
                && plot_ui.response().hovered()
                && let Some(w) = hover
            {
                new_drag = Some((w, if w == Which::Lo { lo } else { hi }));
            }
            // Not `pointer_coordinate`, which assumes the drag pans the view; here it does not.
            let latest = plot_ui.ctx().input(|i| i.pointer.latest_pos());
            if down
                && let Some((w, _)) = new_drag
                && let Some(p) = latest
            {
                let t = time_scale.from_plot(plot_ui.plot_from_screen(p).x);
                if t > 0.0 && t.is_finite() {
                    new_drag = Some((w, t));
                }
            }
            if released && let Some((which, time_s)) = new_drag.take() {
                let before = if which == Which::Lo { fit_lo } else { fit_hi };
                if time_s != before {
                    dropped = Some(BoundDrag {
                        id: run.id,
                        which,
                        time_s,
                    });
                }
            }
            if hover.is_some() || new_drag.is_some() {
                plot_ui
                    .ctx()
                    .set_cursor_icon(egui::CursorIcon::ResizeHorizontal);
            }
        });
        self.transient = Some(shown.transform);
        self.hover = hover;
        self.drag = new_drag;
        if !ui.input(|i| i.pointer.primary_down()) {
            self.drag = None;
        }
        dropped
    }

    fn residuals_ui(&mut self, ui: &mut egui::Ui, focused: Option<&Run>, reframe: bool) {
        ui.horizontal(|ui| {
            ui.strong("Residuals I − I_fit");
            if focused.is_some_and(|r| r.fit_view().is_none()) {
                ui.weak("(the run in focus has no fit)");
            }
        });
        let fit = focused.and_then(|r| r.fit_view().map(|f| (r, f)));
        // The residual SD sets the unit; a model fitted to charge (Anson) has its SD in C, so
        // its current residuals are scaled by their own extent.
        let sd = fit.map_or(1e-9, |(_, f)| match f.planar() {
            Some(p) => p.diagnostics.residual_sd_a,
            None if f.result.fitted_quantity == "current" => f.result.residual_sd,
            None => f.window_residual_max_a / 4.0,
        });
        let (scale, unit) = prefixed(sd, "A");
        let extent = fit.map_or(1.0, |(_, f)| f.window_residual_max_a / scale * 1.25);
        let time_scale = self.prefs.time;
        let plot = self
            .time_axis(Plot::new("residuals").y_axis_min_width(Y_AXIS_WIDTH))
            .link_axis(self.time_link(), Vec2b::new(true, false))
            .link_cursor(self.time_link(), Vec2b::new(true, false))
            .y_axis_label(format!("I − I_fit / {unit}"))
            .default_y_bounds(-extent.max(1e-12), extent.max(1e-12));
        let ink = ink(ui);
        let fill = shade(ui);
        let faint = ui.visuals().weak_text_color().gamma_multiply(0.6);
        plot.show(ui, |plot_ui| {
            let Some((run, fit)) = fit else { return };
            let Some(data) = run.data() else { return };
            if reframe {
                let x = plot_ui.auto_bounds().x;
                plot_ui.set_auto_bounds(Vec2b::new(x, true));
            }
            let w = window_range(data, fit);
            let n = data.time_s.len();
            for (range, colour, name) in [
                (0..w.start, faint, "outside the window"),
                (w.clone(), run.colour, "in the window"),
                (w.end..n, faint, "outside the window "),
            ] {
                if range.is_empty() {
                    continue;
                }
                let pts = time_series(
                    plot_ui,
                    &data.time_s,
                    range,
                    time_scale,
                    |i| fit.residual_a[i] / scale,
                    Some((&fit.residual_a, &fit.residual_pyramid)),
                );
                plot_ui.line(Line::new(name, pts).color(colour).width(1.0));
            }
            plot_ui.hline(HLine::new("zero", 0.0).color(ink).width(1.0));
            let win = &fit.result.window;
            shade_outside(
                plot_ui,
                fill,
                time_scale.to_plot(win.lo.time_s),
                time_scale.to_plot(win.hi.time_s),
            );
        });
    }
}

/// The runs to draw, the one in focus last (on top); others only when selected.
fn ordered(runs: &[Run], focus: Option<RunId>) -> impl Iterator<Item = &Run> {
    runs.iter()
        .filter(move |r| r.selected && Some(r.id) != focus)
        .chain(runs.iter().filter(move |r| Some(r.id) == focus))
}

fn cottrell_ui(ui: &mut egui::Ui, input: &PlotInput<'_>, focused: Option<&Run>, reframe: bool) {
    ui.strong("Cottrell plot");
    let fit = focused.and_then(|r| r.fit_view().map(|f| (r, f)));
    let lo_point = fit.map(|(_, f)| {
        let r = &f.result;
        let t = r.window.lo.time_s;
        ((t - r.t0_s).powf(-0.5), r.predict_a(t))
    });
    let (scale, unit) = prefixed(lo_point.map_or(1e-6, |p| p.1.abs()), "A");
    let mut plot = Plot::new("cottrell")
        .y_axis_min_width(Y_AXIS_WIDTH)
        .x_axis_label("(t − t0)^-½ / s^-½")
        .y_axis_label(format!("I / {unit}"));
    if let Some((x_lo, i_lo)) = lo_point
        && x_lo.is_finite()
        && i_lo.is_finite()
        && x_lo > 0.0
    {
        // Frame the window, with the origin in view so the intercept shows.
        let b = fit.map_or(0.0, |(_, f)| f.result.predict_a(f64::MAX.sqrt()) / scale);
        plot = plot
            .default_x_bounds(0.0, 1.08 * x_lo)
            .default_y_bounds(b.min(0.0), 1.08 * i_lo / scale);
    }
    let focus_id = focused.map(|r| r.id);
    let ink = ink(ui);
    let fill = shade(ui);
    plot.show(ui, |plot_ui| {
        if reframe {
            plot_ui.set_auto_bounds(Vec2b::new(true, true));
        }
        let cols = columns(plot_ui);
        for run in ordered(input.runs, focus_id) {
            let Some(data) = run.data() else { continue };
            let is_focus = Some(run.id) == focus_id;
            let t0 = run.fit_view().map_or(0.0, |f| f.result.t0_s);
            let x_of = |i: usize| (data.time_s[i] - t0).powf(-0.5);
            let n = data.time_s.len();
            // x falls as t grows: the view's right edge is the earliest time in view.
            let (indices, x_lo, x_hi) = match zoomed_x(plot_ui) {
                Some((a, b)) => {
                    let t_hi = if a > 0.0 {
                        t0 + a.powi(-2)
                    } else {
                        f64::INFINITY
                    };
                    let t_lo = if b > 0.0 {
                        t0 + b.powi(-2)
                    } else {
                        f64::INFINITY
                    };
                    (index_range(&data.time_s, t_lo, t_hi), a, b)
                }
                None => (0..n, x_of(n.saturating_sub(1)), x_of(0)),
            };
            let pts = envelope_fast(
                indices,
                x_of,
                (&data.current_a, &data.current_pyramid),
                |i| data.current_a[i] / scale,
                x_lo,
                x_hi,
                cols,
            );
            plot_ui.line(
                Line::new(run.name.clone(), pts)
                    .color(data_colour(run, is_focus))
                    .width(if is_focus { 1.5 } else { 1.0 }),
            );
        }
        let Some((_, fit)) = fit else { return };
        let r = &fit.result;
        let x_at = |t: f64| (t - r.t0_s).powf(-0.5);
        let (x_lo, x_hi) = (x_at(r.window.lo.time_s), x_at(r.window.hi.time_s));
        let (name, line): (&str, Vec<[f64; 2]>) = if fit.planar().is_some() {
            // The Cottrell model is a straight line in (t − t0)^-½: two points of it, from the
            // origin's abscissa (t → ∞) to the window's start.
            (
                "Cottrell fit",
                [f64::MAX.sqrt(), r.window.lo.time_s]
                    .into_iter()
                    .map(|t| [x_at(t).max(0.0), r.predict_a(t) / scale])
                    .collect(),
            )
        } else {
            // Another model bends in these coordinates: its curve over the window.
            (
                "fitted model",
                r.curve(200)
                    .into_iter()
                    .map(|(t, i)| [x_at(t), i / scale])
                    .filter(|p| p[0].is_finite() && p[1].is_finite())
                    .collect(),
            )
        };
        plot_ui.line(
            Line::new(name, line)
                .color(ink)
                .width(1.5)
                .style(LineStyle::dashed_loose()),
        );
        // Early times are at large x.
        shade_outside(plot_ui, fill, x_hi, x_lo);
    });
}

fn plateau_ui(
    ui: &mut egui::Ui,
    input: &PlotInput<'_>,
    focused: Option<&Run>,
    linked: bool,
    reframe: bool,
) {
    ui.strong("I·√t against log t (plateau check)");
    let fit = focused.and_then(|r| r.fit_view().map(|f| (r, f)));
    let s = fit
        .and_then(|(run, f)| run.data().map(|d| f.plateau_level(d)))
        .filter(|s| s.is_finite() && *s != 0.0)
        .map_or(1e-6, f64::abs);
    let (scale, unit) = prefixed(s, "A");
    let mut plot = log_time_axis(Plot::new("plateau").y_axis_min_width(Y_AXIS_WIDTH))
        .y_axis_label(format!("I·√(t − t0) / {unit}·s^½"));
    // Framed on the plateau bins (which start at the window's start) and 2 % of S either side,
    // so a per-cent departure is plain; the charging spike rises out of the top.
    if let Some(p) = fit.and_then(|(_, f)| f.planar()) {
        let bins = &p.plateau.bin_value;
        let lo = bins.iter().copied().fold(s, f64::min);
        let hi = bins.iter().copied().fold(s, f64::max);
        let pad = 0.15 * (hi - lo) + 0.02 * s;
        if hi + pad > lo - pad {
            plot = plot.default_y_bounds((lo - pad) / scale, (hi + pad) / scale);
        }
    }
    if linked {
        plot = plot
            .link_axis(Id::unique("time-axis-log"), Vec2b::new(true, false))
            .link_cursor(Id::unique("time-axis-log"), Vec2b::new(true, false));
    }
    let focus_id = focused.map(|r| r.id);
    let ink = ink(ui);
    let fill = shade(ui);
    let departs = Color32::from_rgb(0xD5, 0x5E, 0x00);
    let z_limit = diffusor_fit::window::WindowOptions::default().departure_z;
    plot.show(ui, |plot_ui| {
        if reframe {
            let x = plot_ui.auto_bounds().x;
            plot_ui.set_auto_bounds(Vec2b::new(x, true));
        }
        for run in ordered(input.runs, focus_id) {
            let Some(data) = run.data() else { continue };
            let is_focus = Some(run.id) == focus_id;
            let f = run.fit_view();
            let pts = time_series(
                plot_ui,
                &data.time_s,
                0..data.time_s.len(),
                Scale::Log,
                |i| f.map_or(data.current_a[i] * data.time_s[i].sqrt(), |f| f.i_sqrt_t[i]) / scale,
                f.map(|f| (f.i_sqrt_t.as_slice(), &f.i_sqrt_t_pyramid)),
            );
            plot_ui.line(
                Line::new(run.name.clone(), pts)
                    .color(data_colour(run, is_focus))
                    .width(1.0),
            );
        }
        let Some((_, fit)) = fit else { return };
        let r = &fit.result;
        let curve: Vec<[f64; 2]> = log_spaced(r.window.lo.time_s, r.window.hi.time_s, 100)
            .into_iter()
            .map(|t| {
                let root = (t - r.t0_s).sqrt();
                [Scale::Log.to_plot(t), r.predict_a(t) * root / scale]
            })
            .collect();
        shade_outside(
            plot_ui,
            fill,
            Scale::Log.to_plot(r.window.lo.time_s),
            Scale::Log.to_plot(r.window.hi.time_s),
        );
        let Some(p) = fit.planar().map(|p| &p.plateau) else {
            // The plateau bins are the Cottrell analysis's; another model shows its curve.
            plot_ui.line(
                Line::new("fitted model × √(t − t0)", curve)
                    .color(ink)
                    .width(2.0),
            );
            return;
        };
        let mut inside = Vec::new();
        let mut out = Vec::new();
        for k in 0..p.bin_time_s.len() {
            let x = Scale::Log.to_plot(p.bin_time_s[k]);
            let y = p.bin_value[k] / scale;
            let e = p.bin_std_error[k] / scale;
            let z = p.bin_z[k];
            let away = z.is_finite() && z.abs() > z_limit;
            plot_ui.line(
                Line::new("bin ± standard error", vec![[x, y - e], [x, y + e]])
                    .color(if away { departs } else { ink })
                    .width(1.0),
            );
            if away { &mut out } else { &mut inside }.push([x, y]);
        }
        plot_ui.points(
            Points::new("log-time bin mean", inside)
                .color(ink)
                .radius(2.5)
                .shape(MarkerShape::Circle)
                .filled(true),
        );
        if !out.is_empty() {
            plot_ui.points(
                Points::new(format!("bin off the plateau (|z| > {z_limit})"), out)
                    .color(departs)
                    .radius(3.0)
                    .shape(MarkerShape::Diamond)
                    .filled(true),
            );
        }
        plot_ui.line(
            Line::new("fitted plateau S + b·√(t − t0)", curve)
                .color(ink)
                .width(2.0),
        );
        if let Some(t) = p.rises_from_s {
            plot_ui.vline(
                VLine::new("convection onset", Scale::Log.to_plot(t))
                    .color(departs)
                    .style(LineStyle::dashed_dense()),
            );
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixes_put_values_between_one_and_a_thousand() {
        let (f, u) = prefixed(1.02e-5, "A");
        assert_eq!((f, u.as_str()), (1e-6, "µA"));
        let (f, u) = prefixed(5.2e-9, "A");
        assert_eq!((f, u.as_str()), (1e-9, "nA"));
        let (f, u) = prefixed(2.0, "A");
        assert_eq!((f, u.as_str()), (1.0, "A"));
    }

    #[test]
    fn log_marks_give_decades_and_their_subdivisions() {
        let marks = log_marks(&GridInput {
            bounds: (-3.0, 1.0),
            base_step_size: 0.01,
        });
        let decades: Vec<f64> = marks
            .iter()
            .filter(|m| m.step_size == 1.0)
            .map(|m| m.value)
            .collect();
        assert_eq!(decades, vec![-3.0, -2.0, -1.0, 0.0, 1.0]);
        // 2…9 in each of the four whole decades inside the bounds.
        assert_eq!(marks.iter().filter(|m| m.step_size == 0.1).count(), 32);
        assert_eq!(
            log_label(
                GridMark {
                    value: -2.0,
                    step_size: 1.0
                },
                "s"
            ),
            "10 ms"
        );
        // Decades 30 points apart: every second one carries a label.
        let crowded = log_marks(&GridInput {
            bounds: (-5.0, 1.0),
            base_step_size: 8.0 / 30.0,
        });
        let labelled: Vec<f64> = crowded
            .iter()
            .filter(|m| m.step_size == 2.0)
            .map(|m| m.value)
            .collect();
        assert_eq!(labelled, vec![-4.0, -2.0, 0.0]);
    }
}
