//! A small SVG plotter for the report: linear and logarithmic axes, polylines reduced to a
//! min/max envelope per pixel column, markers, shaded spans, error bars and reference lines.
//! Every piece of text goes through maud, so it is escaped like the rest of the page; styling is
//! by class names that the report's stylesheet defines, so the plots print as the page does.

use maud::{Markup, html};

use crate::decimate::min_max_envelope;
use crate::ticks::{AxisTicks, Tick, UnitStyle, linear_ticks, log_ticks};

/// Width of a plot in SVG user units (px at 100 %).
pub(crate) const WIDTH: f64 = 470.0;
/// Height of a plot.
pub(crate) const HEIGHT: f64 = 310.0;
const LEFT: f64 = 70.0;
const RIGHT: f64 = 16.0;
const BOTTOM: f64 = 46.0;
/// Average advance of a character at the legend's font size, for laying out the legend.
const CHAR_WIDTH: f64 = 6.3;

/// One axis.
#[derive(Debug, Clone)]
pub(crate) struct Axis {
    /// The quantity in words and symbol, as `time after the step, t`.
    pub title: String,
    /// How the unit is written.
    pub unit: UnitStyle,
    /// Logarithmic scale.
    pub log: bool,
    /// The range shown, in data units.
    pub range: (f64, f64),
    /// Ticks to use instead of the generated ones (run numbers, say).
    pub fixed_ticks: Option<Vec<Tick>>,
}

impl Axis {
    pub(crate) fn new(title: &str, unit: UnitStyle, log: bool, range: (f64, f64)) -> Axis {
        Axis {
            title: title.to_owned(),
            unit,
            log,
            range,
            fixed_ticks: None,
        }
    }

    fn ticks(&self, target: usize) -> AxisTicks {
        if let Some(t) = &self.fixed_ticks {
            let unit = match self.unit {
                UnitStyle::Si(u) | UnitStyle::Plain(u) | UnitStyle::Scaled(u) => u,
            };
            return AxisTicks {
                major: t.clone(),
                minor: Vec::new(),
                unit: unit.to_owned(),
            };
        }
        if self.log {
            log_ticks(self.range.0, self.range.1, self.unit)
        } else {
            linear_ticks(self.range.0, self.range.1, target, self.unit)
        }
    }

    fn transform(&self, v: f64) -> f64 {
        if self.log {
            if v > 0.0 { v.ln() } else { f64::NAN }
        } else {
            v
        }
    }

    /// Position of `v` as a fraction of the axis (0 at the start of the range, 1 at its end).
    fn fraction(&self, v: f64) -> f64 {
        let (a, b) = (self.transform(self.range.0), self.transform(self.range.1));
        (self.transform(v) - a) / (b - a)
    }
}

/// The range of `values` with a margin: 5 % of the span on a linear axis, 3 % of the decades on
/// a logarithmic one (where non-positive values are left out). `None` without usable values.
pub(crate) fn padded_range(values: impl IntoIterator<Item = f64>, log: bool) -> Option<(f64, f64)> {
    let (lo, hi) = values
        .into_iter()
        .filter(|v| v.is_finite() && (!log || *v > 0.0))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    if !(lo <= hi) {
        return None;
    }
    if log {
        let span = (hi / lo).log10().max(0.2);
        let f = 10f64.powf(0.03 * span);
        let (lo, hi) = if hi / lo < 1.6 {
            let mid = (hi * lo).sqrt();
            (mid / 1.3, mid * 1.3)
        } else {
            (lo, hi)
        };
        Some((lo / f, hi * f))
    } else {
        let span = hi - lo;
        let pad = if span > 0.0 {
            0.05 * span
        } else {
            0.05 * lo.abs().max(1e-30)
        };
        Some((lo - pad, hi + pad))
    }
}

/// What a layer looks like; each is a class in the stylesheet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Look {
    /// Measured data: a thin mid-grey line.
    Data,
    /// Measured data under a fit that follows it closely: a broad light line, so that the fit
    /// drawn over it leaves the data visible at its edges.
    Trace,
    /// Lighter data, shown for context (outside the window).
    Context,
    /// The fitted model: a thick dark line.
    Fit,
    /// A reference level or curve: dashed dark line.
    Reference,
    /// Bin means, per-run values and the like: dark markers with bars.
    Point,
    /// A flagged point (a suspected outlier): open markers.
    Flagged,
    /// A detected onset: dashed rust line.
    Onset,
    /// A window bound: dotted dark line.
    Bound,
    /// An excluded region.
    Excluded,
    /// A confidence band.
    Band,
}

impl Look {
    fn class(self) -> &'static str {
        match self {
            Look::Data => "pl-data",
            Look::Trace => "pl-trace",
            Look::Context => "pl-context",
            Look::Fit => "pl-fit",
            Look::Reference => "pl-ref",
            Look::Point => "pl-point",
            Look::Flagged => "pl-flag",
            Look::Onset => "pl-onset",
            Look::Bound => "pl-bound",
            Look::Excluded => "pl-excl",
            Look::Band => "pl-band",
        }
    }
}

/// A marker shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Shape {
    /// A filled circle.
    Circle,
    /// An open square.
    Square,
}

/// Something drawn in the plot area.
#[derive(Debug, Clone)]
pub(crate) enum Layer {
    /// A shaded span of x across the whole height, with a label at its top.
    Span {
        /// Start, data units.
        x0: f64,
        /// End, data units.
        x1: f64,
        /// What the span is.
        label: String,
        /// Put the label at the bottom of the span instead of the top (where the data leave
        /// room for it).
        low: bool,
    },
    /// A shaded span of y across the whole width.
    YBand {
        /// Start, data units.
        y0: f64,
        /// End, data units.
        y1: f64,
    },
    /// A polyline through the points (in data units), reduced to the pixel envelope.
    Line {
        /// Points in order along x.
        points: Vec<(f64, f64)>,
        /// Look.
        look: Look,
    },
    /// Markers.
    Markers {
        /// Points.
        points: Vec<(f64, f64)>,
        /// Shape.
        shape: Shape,
        /// Look.
        look: Look,
    },
    /// Vertical error bars: (x, low, high).
    Bars {
        /// Bars.
        bars: Vec<(f64, f64, f64)>,
        /// Look.
        look: Look,
    },
    /// A vertical line with an optional label.
    VLine {
        /// Position, data units.
        x: f64,
        /// Look.
        look: Look,
        /// Label next to the line's top.
        label: Option<String>,
    },
    /// A horizontal line.
    HLine {
        /// Position, data units.
        y: f64,
        /// Look.
        look: Look,
    },
}

/// A legend entry.
#[derive(Debug, Clone)]
pub(crate) struct Key {
    /// Look of the swatch.
    pub look: Look,
    /// Draw the swatch as a marker of this shape instead of a line.
    pub marker: Option<Shape>,
    /// Text.
    pub text: String,
}

impl Key {
    pub(crate) fn line(look: Look, text: &str) -> Key {
        Key {
            look,
            marker: None,
            text: text.to_owned(),
        }
    }

    pub(crate) fn marker(look: Look, shape: Shape, text: &str) -> Key {
        Key {
            look,
            marker: Some(shape),
            text: text.to_owned(),
        }
    }
}

/// A complete plot.
#[derive(Debug, Clone)]
pub(crate) struct Plot {
    /// Unique within the page (used for the clip path).
    pub id: String,
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
    /// Layers, drawn in order.
    pub layers: Vec<Layer>,
    /// Legend entries.
    pub legend: Vec<Key>,
    /// A one-sentence description for screen readers.
    pub description: String,
}

fn f1(v: f64) -> String {
    format!("{v:.1}")
}

fn axis_title(a: &Axis, unit: &str) -> String {
    if unit.is_empty() {
        a.title.clone()
    } else if unit.contains(' ') {
        format!("{} / ({unit})", a.title)
    } else {
        format!("{} / {unit}", a.title)
    }
}

/// Splits the legend into rows that fit the width.
fn legend_rows(keys: &[Key], width: f64) -> Vec<Vec<(f64, &Key)>> {
    let mut rows: Vec<Vec<(f64, &Key)>> = Vec::new();
    let mut x = 0.0;
    for k in keys {
        let w = 26.0 + CHAR_WIDTH * k.text.chars().count() as f64 + 14.0;
        if rows.is_empty() || (x + w > width && x > 0.0) {
            rows.push(Vec::new());
            x = 0.0;
        }
        if let Some(row) = rows.last_mut() {
            row.push((x, k));
        }
        x += w;
    }
    rows
}

impl Plot {
    /// The plot as an inline `<svg>` element.
    pub(crate) fn render(&self) -> Markup {
        let plot_w = WIDTH - LEFT - RIGHT;
        let rows = legend_rows(&self.legend, plot_w);
        let top = 14.0 + 16.0 * rows.len() as f64;
        let plot_h = HEIGHT - top - BOTTOM;
        let px = |x: f64| LEFT + self.x.fraction(x) * plot_w;
        let py = |y: f64| top + (1.0 - self.y.fraction(y)) * plot_h;
        let xt = self.x.ticks(6);
        let yt = self.y.ticks(5);
        let clip = format!("{}-clip", self.id);
        let clip_ref = format!("url(#{clip})");
        let in_x = |v: f64| {
            let f = self.x.fraction(v);
            (-1e-9..=1.0 + 1e-9).contains(&f)
        };
        let in_y = |v: f64| {
            let f = self.y.fraction(v);
            (-1e-9..=1.0 + 1e-9).contains(&f)
        };
        html! {
            svg.plot viewBox={ "0 0 " (WIDTH) " " (HEIGHT) } role="img" aria-label=(self.description) {
                title { (self.description) }
                defs {
                    clipPath id=(clip) {
                        rect x=(f1(LEFT)) y=(f1(top)) width=(f1(plot_w)) height=(f1(plot_h)) {}
                    }
                }
                // Grid first, so everything else sits on top of it.
                g.pl-grid {
                    @for t in &xt.major {
                        @if in_x(t.value) {
                            line x1=(f1(px(t.value))) x2=(f1(px(t.value))) y1=(f1(top)) y2=(f1(top + plot_h)) {}
                        }
                    }
                    @for t in &yt.major {
                        @if in_y(t.value) {
                            line x1=(f1(LEFT)) x2=(f1(LEFT + plot_w)) y1=(f1(py(t.value))) y2=(f1(py(t.value))) {}
                        }
                    }
                }
                g clip-path=(clip_ref) {
                    @for layer in &self.layers {
                        (self.layer(layer, &px, &py, top, plot_h))
                    }
                }
                rect.pl-frame x=(f1(LEFT)) y=(f1(top)) width=(f1(plot_w)) height=(f1(plot_h)) {}
                g.pl-axis {
                    @for t in &xt.major {
                        @if in_x(t.value) {
                            line x1=(f1(px(t.value))) x2=(f1(px(t.value))) y1=(f1(top + plot_h)) y2=(f1(top + plot_h + 5.0)) {}
                            @if let Some(l) = &t.label {
                                text.pl-tick x=(f1(px(t.value))) y=(f1(top + plot_h + 17.0)) text-anchor="middle" { (l) }
                            }
                        }
                    }
                    @for v in &xt.minor {
                        @if in_x(*v) {
                            line x1=(f1(px(*v))) x2=(f1(px(*v))) y1=(f1(top + plot_h)) y2=(f1(top + plot_h + 3.0)) {}
                        }
                    }
                    @for t in &yt.major {
                        @if in_y(t.value) {
                            line x1=(f1(LEFT - 5.0)) x2=(f1(LEFT)) y1=(f1(py(t.value))) y2=(f1(py(t.value))) {}
                            @if let Some(l) = &t.label {
                                text.pl-tick x=(f1(LEFT - 8.0)) y=(f1(py(t.value) + 4.0)) text-anchor="end" { (l) }
                            }
                        }
                    }
                    @for v in &yt.minor {
                        @if in_y(*v) {
                            line x1=(f1(LEFT - 3.0)) x2=(f1(LEFT)) y1=(f1(py(*v))) y2=(f1(py(*v))) {}
                        }
                    }
                    text.pl-title x=(f1(LEFT + plot_w / 2.0)) y=(f1(HEIGHT - 8.0)) text-anchor="middle" {
                        (axis_title(&self.x, &xt.unit))
                    }
                    text.pl-title transform={ "translate(15 " (f1(top + plot_h / 2.0)) ") rotate(-90)" } text-anchor="middle" {
                        (axis_title(&self.y, &yt.unit))
                    }
                }
                g.pl-legend {
                    @for (r, row) in rows.iter().enumerate() {
                        @for (x, key) in row {
                            (legend_key(LEFT + x, 12.0 + 16.0 * r as f64, key))
                        }
                    }
                }
            }
        }
    }

    fn layer(
        &self,
        layer: &Layer,
        px: &dyn Fn(f64) -> f64,
        py: &dyn Fn(f64) -> f64,
        top: f64,
        plot_h: f64,
    ) -> Markup {
        match layer {
            Layer::Span { x0, x1, label, low } => {
                let (a, b) = (px(*x0).max(LEFT), px(*x1).min(WIDTH - RIGHT));
                if !(b > a) {
                    return html! {};
                }
                html! {
                    rect.(Look::Excluded.class()) x=(f1(a)) y=(f1(top)) width=(f1(b - a)) height=(f1(plot_h)) {}
                    @if b - a > 6.0 * label.chars().count() as f64 + 8.0 {
                        text.pl-span x=(f1((a + b) / 2.0)) y=(f1(if *low { top + plot_h - 6.0 } else { top + 14.0 })) text-anchor="middle" { (label) }
                    }
                }
            }
            Layer::YBand { y0, y1 } => {
                let (a, b) = (py(*y1), py(*y0));
                html! {
                    rect.(Look::Band.class()) x=(f1(LEFT)) y=(f1(a.min(b))) width=(f1(WIDTH - LEFT - RIGHT)) height=(f1((b - a).abs())) {}
                }
            }
            Layer::Line { points, look } => {
                // Gaps (NaN, or non-positive values on a log axis) split the line.
                let mut runs: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
                for &(x, y) in points {
                    let p = (px(x), py(y));
                    if p.0.is_finite() && p.1.is_finite() {
                        if let Some(last) = runs.last_mut() {
                            last.push(p);
                        }
                    } else if runs.last().is_some_and(|r| !r.is_empty()) {
                        runs.push(Vec::new());
                    }
                }
                html! {
                    @for run in runs.iter().filter(|r| !r.is_empty()) {
                        polyline.(look.class()) points=(points_attr(&min_max_envelope(run))) {}
                    }
                }
            }
            Layer::Markers {
                points,
                shape,
                look,
            } => html! {
                @for &(x, y) in points {
                    @let (cx, cy) = (px(x), py(y));
                    @if cx.is_finite() && cy.is_finite() {
                        @match shape {
                            Shape::Circle => circle.(look.class()) cx=(f1(cx)) cy=(f1(cy)) r="3.2" {},
                            Shape::Square => rect.(look.class()) x=(f1(cx - 3.5)) y=(f1(cy - 3.5)) width="7" height="7" {},
                        }
                    }
                }
            },
            Layer::Bars { bars, look } => html! {
                @for &(x, lo, hi) in bars {
                    @let (cx, a, b) = (px(x), py(lo), py(hi));
                    @if cx.is_finite() && a.is_finite() && b.is_finite() {
                        path.(look.class()) d={
                            "M" (f1(cx)) " " (f1(a)) "V" (f1(b))
                            "M" (f1(cx - 3.0)) " " (f1(a)) "h6"
                            "M" (f1(cx - 3.0)) " " (f1(b)) "h6"
                        } {}
                    }
                }
            },
            Layer::VLine { x, look, label } => {
                let cx = px(*x);
                if !cx.is_finite() {
                    return html! {};
                }
                // Labels go to the right of the line unless that runs off the plot.
                let room = WIDTH - RIGHT - cx;
                let right = label
                    .as_ref()
                    .is_none_or(|l| room > CHAR_WIDTH * l.chars().count() as f64 + 8.0);
                // Onsets are labelled at the top and bounds at the bottom, so that an onset
                // next to a bound does not print over it.
                let ly = if *look == Look::Onset {
                    top + 14.0
                } else {
                    top + plot_h - 6.0
                };
                html! {
                    line.(look.class()) x1=(f1(cx)) x2=(f1(cx)) y1=(f1(top)) y2=(f1(top + plot_h)) {}
                    @if let Some(l) = label {
                        @if right {
                            text.pl-note x=(f1(cx + 4.0)) y=(f1(ly)) { (l) }
                        } @else {
                            text.pl-note x=(f1(cx - 4.0)) y=(f1(ly)) text-anchor="end" { (l) }
                        }
                    }
                }
            }
            Layer::HLine { y, look } => {
                let cy = py(*y);
                if !cy.is_finite() {
                    return html! {};
                }
                html! {
                    line.(look.class()) x1=(f1(LEFT)) x2=(f1(WIDTH - RIGHT)) y1=(f1(cy)) y2=(f1(cy)) {}
                }
            }
        }
    }
}

fn points_attr(points: &[(f64, f64)]) -> String {
    let mut s = String::with_capacity(points.len() * 12);
    for (i, (x, y)) in points.iter().enumerate() {
        if i > 0 {
            s.push(' ');
        }
        s.push_str(&f1(*x));
        s.push(',');
        s.push_str(&f1(*y));
    }
    s
}

fn legend_key(x: f64, y: f64, key: &Key) -> Markup {
    let class = key.look.class();
    html! {
        @match key.marker {
            Some(Shape::Circle) => circle.(class) cx=(f1(x + 10.0)) cy=(f1(y - 4.0)) r="3.2" {},
            Some(Shape::Square) => rect.(class) x=(f1(x + 6.5)) y=(f1(y - 7.5)) width="7" height="7" {},
            None => @if matches!(key.look, Look::Excluded | Look::Band) {
                rect.(class) x=(f1(x)) y=(f1(y - 9.0)) width="20" height="10" {}
            } @else {
                line.(class) x1=(f1(x)) x2=(f1(x + 20.0)) y1=(f1(y - 4.0)) y2=(f1(y - 4.0)) {}
            },
        }
        text.pl-key x=(f1(x + 26.0)) y=(f1(y)) { (key.text) }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plot_with(label: &str) -> Plot {
        Plot {
            id: "t".to_owned(),
            x: Axis::new("time, t", UnitStyle::Si("s"), true, (1e-3, 10.0)),
            y: Axis::new("current, I", UnitStyle::Si("A"), false, (0.0, 1e-5)),
            layers: vec![
                Layer::Span {
                    x0: 1e-3,
                    x1: 1e-2,
                    label: label.to_owned(),
                    low: false,
                },
                Layer::Line {
                    points: (1..=100_000)
                        .map(|i| {
                            let t = 1e-3 * 10f64.powf(4.0 * i as f64 / 100_000.0);
                            (t, 3e-6 / t.sqrt())
                        })
                        .collect(),
                    look: Look::Data,
                },
            ],
            legend: vec![Key::line(Look::Data, label)],
            description: label.to_owned(),
        }
    }

    #[test]
    fn text_is_escaped_and_long_series_are_decimated() {
        let svg = plot_with("<b>&\"x\"</b>").render().into_string();
        assert!(!svg.contains("<b>"));
        assert!(svg.contains("&lt;b&gt;&amp;&quot;x&quot;&lt;/b&gt;"));
        let points = svg
            .split("points=\"")
            .nth(1)
            .and_then(|s| s.split('"').next())
            .map(|s| s.split(' ').count())
            .unwrap_or(0);
        // 384 pixels wide, so 385 columns with both edges, at most two points each, from
        // 100 000 samples.
        assert!(points > 100 && points <= 2 * 385, "{points} points");
        assert!(svg.contains(">1 ms<") && svg.contains(">10 s<"));
        assert!(svg.contains("current, I / µA"));
    }

    #[test]
    fn ranges_pad_and_skip_what_a_log_axis_cannot_show() {
        let (lo, hi) = padded_range([0.0, 10.0], false).expect("range");
        assert!((lo + 0.5).abs() < 1e-12 && (hi - 10.5).abs() < 1e-12);
        let (lo, hi) = padded_range([-1.0, 1e-3, 10.0], true).expect("range");
        // Four decades, padded by 3 % of them (0.12 decades) at each end.
        assert!((lo.log10() + 3.12).abs() < 1e-9, "{lo}");
        assert!((hi.log10() - 1.12).abs() < 1e-9, "{hi}");
        assert!(padded_range([f64::NAN], false).is_none());
    }
}
