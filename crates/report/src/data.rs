//! The data as the fit saw them: times after the analysed step and the faradaic current with the
//! background removed, the window's indices, and the embedded CSV.

use std::fmt::Write as _;

use base64::Engine as _;
use diffusor_fit::analysis::ModelResult;
use diffusor_fit::planar::{Background, PlanarResult, WindowResult};
use diffusor_trace::{Polarity, Segment, Trace};

/// Most rows the embedded CSV holds; longer windows are thinned to every k-th point.
pub const MAX_CSV_ROWS: usize = 20_000;

/// The analysed step's samples after the step, as [`diffusor_fit::planar::analyze`] prepares
/// them.
#[derive(Debug, Clone)]
pub(crate) struct Processed {
    /// Time after the step in s (the importer's onset, before the fitted t0 shift), positive.
    pub time_s: Vec<f64>,
    /// Current in A, faradaic direction positive, background removed.
    pub current_a: Vec<f64>,
    /// First index inside the window.
    pub window_start: usize,
    /// One past the last index inside the window.
    pub window_end: usize,
}

/// A fitted curve over a window: what the transient, the residuals and the CSV need of a
/// result, the planar analysis's or any model's.
pub(crate) trait Fitted {
    /// The window, with its bounds' reasons.
    fn window(&self) -> &WindowResult;
    /// The fitted current at `t_s` after the step, in A.
    fn predict_a(&self, t_s: f64) -> f64;
}

impl Fitted for PlanarResult {
    fn window(&self) -> &WindowResult {
        &self.window
    }
    fn predict_a(&self, t_s: f64) -> f64 {
        PlanarResult::predict_a(self, t_s)
    }
}

impl Fitted for ModelResult {
    fn window(&self) -> &WindowResult {
        &self.window
    }
    fn predict_a(&self, t_s: f64) -> f64 {
        ModelResult::predict_a(self, t_s)
    }
}

/// Linear interpolation of a blank, as the fit does it; NaN outside the blank.
fn interpolate(time_s: &[f64], current_a: &[f64], t: f64) -> f64 {
    let k = time_s.partition_point(|&x| x < t);
    if k == 0 {
        return if time_s.first() == Some(&t) {
            current_a[0]
        } else {
            f64::NAN
        };
    }
    if k >= time_s.len() {
        return f64::NAN;
    }
    let (t0, t1) = (time_s[k - 1], time_s[k]);
    let f = (t - t0) / (t1 - t0);
    current_a[k - 1] + f * (current_a[k] - current_a[k - 1])
}

impl Processed {
    /// Prepares `segment` of `trace` the way the planar analysis does: the segment's own time
    /// origin, only samples after it, the background subtracted and the faradaic sign made
    /// positive. The window is the result's.
    pub(crate) fn new(
        trace: &Trace,
        segment: &Segment,
        background: &Background,
        result: &dyn Fitted,
    ) -> Processed {
        let sign = segment
            .polarity
            .or(trace.polarity)
            .map_or(1.0, Polarity::factor);
        let end = segment.end.min(trace.rows());
        let start = segment.start.min(end);
        let all_t = &trace.time_s[start..end];
        let first = all_t.partition_point(|&t| t - segment.start_time_s <= 0.0);
        let time_s: Vec<f64> = all_t[first..]
            .iter()
            .map(|t| t - segment.start_time_s)
            .collect();
        let raw = &trace.current_a[start..end][first..];
        let baseline = trace.baseline.as_ref().map_or(0.0, |b| b.mean_a);
        let current_a: Vec<f64> = match background {
            Background::None => raw.iter().map(|c| c * sign).collect(),
            Background::Baseline => raw.iter().map(|c| (c - baseline) * sign).collect(),
            Background::Constant { current_a } => {
                raw.iter().map(|c| (c - current_a) * sign).collect()
            }
            Background::Blank {
                time_s: bt,
                current_a: bc,
            } => time_s
                .iter()
                .zip(raw)
                .map(|(t, c)| (c - interpolate(bt, bc, *t)) * sign)
                .collect(),
        };
        // The fit's own rule: t ≥ lo and t ≤ hi.
        let window_start = time_s.partition_point(|&t| t < result.window().lo.time_s);
        let window_end = time_s.partition_point(|&t| t <= result.window().hi.time_s);
        Processed {
            time_s,
            current_a,
            window_start,
            window_end: window_end.max(window_start),
        }
    }

    /// The window's indices.
    pub(crate) fn window(&self) -> std::ops::Range<usize> {
        self.window_start..self.window_end
    }

    /// The residual standard deviation √(Σr²/(n − p)) over the window, recomputed from these
    /// data and the result's parameters, with p the number of line parameters.
    pub(crate) fn residual_sd(&self, result: &PlanarResult) -> f64 {
        let p = if result.params.iter().any(|p| p.symbol == "b") {
            2
        } else {
            1
        };
        let n = self.window().len();
        if n <= p {
            return f64::NAN;
        }
        let rss: f64 = self
            .window()
            .map(|i| (self.current_a[i] - result.predict_a(self.time_s[i])).powi(2))
            .sum();
        (rss / (n - p) as f64).sqrt()
    }
}

/// The embedded CSV of the window.
#[derive(Debug, Clone)]
pub(crate) struct WindowCsv {
    /// The file's text.
    pub text: String,
    /// Data rows written.
    pub rows: usize,
    /// Every `stride`-th window point was written.
    pub stride: usize,
    /// Points in the window.
    pub window_points: usize,
}

/// The window as CSV: time after the step, current, fitted current and residual, all SI, with
/// every value written in the shortest form that reads back to the same double.
pub(crate) fn window_csv(data: &Processed, result: &dyn Fitted) -> WindowCsv {
    let window = data.window();
    let n = window.len();
    // Even thinning keeps the sampling regular, which a refit elsewhere assumes; min/max
    // picking would bias a least-squares fit.
    let stride = n.div_ceil(MAX_CSV_ROWS).max(1);
    let mut text = String::with_capacity(n / stride * 90 + 64);
    text.push_str("time_s,current_A,fitted_A,residual_A\n");
    let mut rows = 0;
    for i in window.step_by(stride) {
        let (t, y) = (data.time_s[i], data.current_a[i]);
        let fit = result.predict_a(t);
        let _ = writeln!(text, "{t:e},{y:e},{fit:e},{:e}", y - fit);
        rows += 1;
    }
    WindowCsv {
        text,
        rows,
        stride,
        window_points: n,
    }
}

/// `text` as a `data:` URL with the given media type, base64-encoded.
pub(crate) fn data_url(media_type: &str, text: &str) -> String {
    format!(
        "data:{media_type};base64,{}",
        base64::engine::general_purpose::STANDARD.encode(text.as_bytes())
    )
}

/// A file name safe for the `download` attribute: letters, digits, `-`, `_` and `.` kept, the
/// rest replaced by `_`.
pub(crate) fn safe_file_name(label: &str) -> String {
    let base = label.rsplit(['/', '\\']).next().unwrap_or(label);
    let stem = base
        .rsplit_once('.')
        .map_or(base, |(s, _)| if s.is_empty() { base } else { s });
    let cleaned: String = stem
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.') {
                c
            } else {
                '_'
            }
        })
        .collect();
    let cleaned = cleaned.trim_matches(['.', '_']);
    if cleaned.is_empty() {
        "run".to_owned()
    } else {
        cleaned.to_owned()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn file_names_for_downloads_are_tame() {
        assert_eq!(safe_file_name("sample-data/planar-rep1.csv"), "planar-rep1");
        assert_eq!(
            safe_file_name("<img src=x onerror=alert(1)>.csv"),
            "img_src_x_onerror_alert_1"
        );
        assert_eq!(safe_file_name("C:\\data\\run 3.txt"), "run_3");
        assert_eq!(safe_file_name("///"), "run");
    }

    #[test]
    fn blank_interpolation_matches_the_fit() {
        let t = [0.0, 1.0, 2.0];
        let c = [0.0, 10.0, 30.0];
        assert_eq!(interpolate(&t, &c, 1.5), 20.0);
        assert_eq!(interpolate(&t, &c, 0.0), 0.0);
        assert!(interpolate(&t, &c, 2.5).is_nan());
    }
}
