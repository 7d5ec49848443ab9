//! A loaded run: where it came from, its trace, its window as typed, and its latest fit. The
//! arrays to plot are prepared off the UI thread, once per import and once per fit.

use std::path::PathBuf;
use std::sync::Arc;

use diffusor_fit::analysis::ModelResult;
use diffusor_fit::planar::PlanarResult;
use diffusor_fit::window::BoundChoice;
use diffusor_trace::{Segment, Trace};
use eframe::egui::Color32;

use crate::cell_form::parse_number;
use crate::decimate::Pyramid;
use crate::format;

/// Identifies a run for as long as the window is open.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct RunId(pub u64);

/// Where a run's bytes come from.
#[derive(Debug, Clone)]
pub enum Origin {
    /// A bundled demo file (synthetic).
    Demo,
    /// A file on disk, opened by path.
    File(PathBuf),
    /// A file dropped onto the window.
    Dropped(PathBuf),
}

/// The step of a trace as the plots and the fit see it: times after the step and the faradaic
/// current with its sign made positive.
#[derive(Debug)]
pub struct RunData {
    /// The imported trace.
    pub trace: Trace,
    /// The step analysed (the first one of the file).
    pub step: Segment,
    /// Times after the step, in s, positive and increasing.
    pub time_s: Vec<f64>,
    /// Current at those times, in A, multiplied by the step's polarity so the faradaic
    /// current is positive.
    pub current_a: Vec<f64>,
    /// Whether the file's current was negated (a cathodic step).
    pub sign_reversed: bool,
    /// How many potential steps the file holds.
    pub steps: usize,
    /// SHA-256 of the bytes read, in hex (what a session records to tell a changed file).
    pub sha256: Option<String>,
    /// Block extremes of `current_a`, so a frame draws ten million samples quickly.
    pub current_pyramid: Pyramid,
}

impl RunData {
    /// The first step of `trace`, or why there is none.
    pub fn new(trace: Trace) -> Result<RunData, String> {
        let step = trace
            .steps()
            .next()
            .cloned()
            .ok_or_else(|| "no potential step found in the file".to_owned())?;
        let steps = trace.steps().count();
        let all_t = trace.segment_time_s(&step);
        let all_i = trace.faradaic_current_a(&step);
        // The fit uses the samples after the step only; so do the plots.
        let first = all_t.partition_point(|&t| t <= 0.0);
        let sign_reversed = step
            .polarity
            .or(trace.polarity)
            .is_some_and(|p| p.factor() < 0.0);
        Ok(RunData {
            time_s: all_t[first..].to_vec(),
            current_a: all_i[first..].to_vec(),
            trace,
            step,
            sign_reversed,
            steps,
            sha256: None,
            current_pyramid: Pyramid::default(),
        })
        .map(|mut d| {
            d.current_pyramid = Pyramid::new(&d.current_a);
            d
        })
    }
}

/// A fit and the arrays that depend on it, index for index with [`RunData::time_s`].
#[derive(Debug)]
pub struct FitView {
    /// The engine's result, whatever the model.
    pub result: ModelResult,
    /// I − I_fit, in A.
    pub residual_a: Vec<f64>,
    /// (t − t0)^-½, in s^-½: the Cottrell plot's abscissa.
    pub inv_sqrt_s: Vec<f64>,
    /// I·√(t − t0), in A·s^½.
    pub i_sqrt_t: Vec<f64>,
    /// The current over the model's: (I − b)·√(t − t0)/S for the Cottrell analysis, I/I_fit
    /// for the other models; 1 where the current follows the model.
    pub normalised: Vec<f64>,
    /// The largest |I − I_fit| inside the window, in A: how far the residual plot must reach.
    pub window_residual_max_a: f64,
    /// Block extremes of `residual_a`.
    pub residual_pyramid: Pyramid,
    /// Block extremes of `i_sqrt_t`.
    pub i_sqrt_t_pyramid: Pyramid,
    /// Block extremes of `normalised`.
    pub normalised_pyramid: Pyramid,
}

impl FitView {
    /// Prepares the plotted arrays of `result` fitted to `data`.
    pub fn new(result: ModelResult, data: &RunData) -> FitView {
        let t0 = result.t0_s;
        // The Cottrell analysis normalises by its line, so a departure from t^-½ shows; the
        // other models by their own curve.
        let line = result.planar().map(|p| {
            let find = |sym: &str| p.params.iter().find(|q| q.symbol == sym);
            (
                find("S").map_or(f64::NAN, |q| q.estimate.value),
                find("b").map_or(0.0, |q| q.estimate.value),
            )
        });
        let n = data.time_s.len();
        let mut residual_a = Vec::with_capacity(n);
        let mut inv_sqrt_s = Vec::with_capacity(n);
        let mut i_sqrt_t = Vec::with_capacity(n);
        let mut normalised = Vec::with_capacity(n);
        for (&t, &i) in data.time_s.iter().zip(&data.current_a) {
            let dt = t - t0;
            let root = if dt > 0.0 { dt.sqrt() } else { f64::NAN };
            let fitted = result.predict_a(t);
            residual_a.push(i - fitted);
            inv_sqrt_s.push(1.0 / root);
            i_sqrt_t.push(i * root);
            normalised.push(match line {
                Some((s, b)) => (i - b) * root / s,
                None => i / fitted,
            });
        }
        let w = &result.window;
        let a = data.time_s.partition_point(|&t| t < w.lo.time_s);
        let z = data.time_s.partition_point(|&t| t <= w.hi.time_s);
        let window_residual_max_a = residual_a[a..z.max(a)]
            .iter()
            .filter(|r| r.is_finite())
            .fold(0.0_f64, |m, r| m.max(r.abs()));
        FitView {
            residual_pyramid: Pyramid::new(&residual_a),
            i_sqrt_t_pyramid: Pyramid::new(&i_sqrt_t),
            normalised_pyramid: Pyramid::new(&normalised),
            window_residual_max_a,
            result,
            residual_a,
            inv_sqrt_s,
            i_sqrt_t,
            normalised,
        }
    }

    /// The Cottrell analysis, when that is the model fitted.
    pub fn planar(&self) -> Option<&PlanarResult> {
        self.result.planar()
    }

    /// I·√t where the current follows t^-½, in A·s^½: the Cottrell slope S, or else the median
    /// of I·√(t − t0) over the window (a scale for the plateau plot).
    pub fn plateau_level(&self, data: &RunData) -> f64 {
        if let Some(s) = self
            .planar()
            .and_then(|p| p.params.iter().find(|q| q.symbol == "S"))
        {
            return s.estimate.value;
        }
        let w = &self.result.window;
        let a = data.time_s.partition_point(|&t| t < w.lo.time_s);
        let z = data.time_s.partition_point(|&t| t <= w.hi.time_s);
        let mut v: Vec<f64> = self.i_sqrt_t[a..z.max(a)]
            .iter()
            .copied()
            .filter(|x| x.is_finite())
            .collect();
        if v.is_empty() {
            return f64::NAN;
        }
        let mid = v.len() / 2;
        *v.select_nth_unstable_by(mid, f64::total_cmp).1
    }
}

/// Where the import of a run stands.
#[derive(Debug, Clone)]
pub enum Import {
    /// Being read; the importer counts its progress there and is told to stop through it.
    Loading(Arc<diffusor_trace::Progress>),
    /// Read.
    Ready(Arc<RunData>),
    /// Could not be read; the message says why.
    Failed(String),
}

/// The stage of a reading and the fraction of it done: the file read into memory first
/// (counted by the worker), then parsed (counted by the importer).
pub fn reading_stage(p: &diffusor_trace::Progress) -> Option<(&'static str, f32)> {
    let total = p.total();
    if total == 0 {
        return None;
    }
    let share = |done: u64| (done as f64 / total as f64).clamp(0.0, 1.0) as f32;
    Some(if p.read() < total {
        ("reading the file", share(p.read()))
    } else if p.parsed() < total {
        ("parsing", share(p.parsed()))
    } else {
        // The importer's checks (time order, onset, segments) and the plots' precomputed
        // extremes come after the last block.
        ("checking the trace", 1.0)
    })
}

/// One bound of the window as the user set it, with the text in its field.
#[derive(Debug, Clone, PartialEq)]
pub struct BoundField {
    /// What the fit is told.
    pub choice: BoundChoice,
    /// The field's text.
    pub text: String,
    /// The text the program last put there (typing something else is an edit).
    pub shown: String,
    /// Why the text cannot be used.
    pub error: Option<String>,
}

impl Default for BoundField {
    fn default() -> Self {
        BoundField {
            choice: BoundChoice::Auto,
            text: String::new(),
            shown: String::new(),
            error: None,
        }
    }
}

impl BoundField {
    /// Puts the bound the fit used into the field, unless the user is typing there.
    pub fn show_time(&mut self, t_s: f64) {
        let text = format::plain(t_s, 4);
        self.text.clone_from(&text);
        self.shown = text;
        self.error = None;
    }

    /// Reads the field when the user has changed it: `Some` new choice, or `None` (unchanged or
    /// unusable, with the error set).
    pub fn take_edit(&mut self) -> Option<BoundChoice> {
        if self.text.trim() == self.shown.trim() {
            self.error = None;
            return None;
        }
        if self.text.trim().eq_ignore_ascii_case("auto") || self.text.trim().is_empty() {
            self.error = None;
            return Some(BoundChoice::Auto);
        }
        match parse_number(&self.text) {
            Ok(Some(v)) if v >= 0.0 => {
                self.error = None;
                Some(BoundChoice::At(v))
            }
            Ok(_) => {
                self.error = Some("a time in seconds after the step, 0 or more".to_owned());
                None
            }
            Err(e) => {
                self.error = Some(e);
                None
            }
        }
    }
}

/// The latest fit of a run and whether a newer one is on its way.
#[derive(Debug, Clone, Default)]
pub struct FitState {
    /// The newest result received: the fit, or why it failed.
    pub latest: Option<Result<Arc<FitView>, String>>,
    /// The generation of `latest`.
    pub latest_generation: u64,
    /// The generation of the fit being computed, if any.
    pub pending: Option<u64>,
    /// A newer fit was cancelled: `latest` is from before the last change of entries.
    pub outdated: bool,
}

/// The columns the user named for a file whose columns the importer could not tell apart: a
/// position from 1 or the header text, empty to let the importer decide.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct ColumnFields {
    /// The time column.
    pub time: String,
    /// The current column.
    pub current: String,
}

impl ColumnFields {
    /// The importer's options for these choices.
    pub fn options(&self) -> diffusor_trace::ImportOptions {
        let pick = |t: &str| (!t.trim().is_empty()).then(|| diffusor_trace::ColumnChoice::parse(t));
        diffusor_trace::ImportOptions {
            time_column: pick(&self.time),
            current_column: pick(&self.current),
            ..Default::default()
        }
    }

    /// Whether any column was named.
    pub fn any(&self) -> bool {
        !(self.time.trim().is_empty() && self.current.trim().is_empty())
    }
}

/// A loaded run.
#[derive(Debug, Clone)]
pub struct Run {
    /// Its identifier.
    pub id: RunId,
    /// Its name (the file name).
    pub name: String,
    /// Where it came from.
    pub origin: Origin,
    /// Its colour in every plot.
    pub colour: Color32,
    /// Shown in the overlays and counted in the replicate comparison.
    pub selected: bool,
    /// The import.
    pub import: Import,
    /// Lower bound of the window.
    pub lo: BoundField,
    /// Upper bound of the window.
    pub hi: BoundField,
    /// The fit.
    pub fit: FitState,
    /// Generation counter for fits, so a late result of an older request is not shown.
    pub generations: u64,
    /// Fits up to this generation were cancelled: their results are dropped when they come.
    pub cancelled_through: u64,
    /// The SHA-256 a saved session recorded for this run's file, to compare on import.
    pub expected_sha256: Option<String>,
    /// A warning about the run that is not the fit's (a changed file, an unknown model).
    pub notice: Option<String>,
    /// The columns named for the import.
    pub columns: ColumnFields,
    /// The model asked for and its entries.
    pub model: crate::model_form::ModelFields,
}

impl Run {
    /// How far the reading has got, in words, and the fraction of that stage done; `None`
    /// when the run is not being read or the size of the file is not known yet.
    pub fn reading_progress(&self) -> Option<(&'static str, f32)> {
        match &self.import {
            Import::Loading(p) => reading_stage(p),
            _ => None,
        }
    }

    /// The run's data once imported.
    pub fn data(&self) -> Option<&Arc<RunData>> {
        match &self.import {
            Import::Ready(d) => Some(d),
            _ => None,
        }
    }

    /// The latest successful fit.
    pub fn fit_view(&self) -> Option<&Arc<FitView>> {
        match &self.fit.latest {
            Some(Ok(v)) => Some(v),
            _ => None,
        }
    }

    /// The error to show beside the run: the import's, else the latest fit's.
    pub fn error(&self) -> Option<&str> {
        match (&self.import, &self.fit.latest) {
            (Import::Failed(e), _) | (_, Some(Err(e))) => Some(e),
            _ => None,
        }
    }

    /// Whether something is being computed for this run.
    pub fn busy(&self) -> bool {
        matches!(self.import, Import::Loading(_)) || self.fit.pending.is_some()
    }

    /// Whether this is a bundled demo file.
    pub fn is_demo(&self) -> bool {
        matches!(self.origin, Origin::Demo)
    }
}

/// Colours for runs, in order: the Okabe–Ito palette for colour-blind readers (M. Okabe and
/// K. Ito, "Color Universal Design", 2008), without its yellow, which is unreadable on white.
pub const PALETTE: [Color32; 7] = [
    Color32::from_rgb(0x00, 0x72, 0xB2),
    Color32::from_rgb(0xD5, 0x5E, 0x00),
    Color32::from_rgb(0x00, 0x9E, 0x73),
    Color32::from_rgb(0xCC, 0x79, 0xA7),
    Color32::from_rgb(0x56, 0xB4, 0xE9),
    Color32::from_rgb(0xE6, 0x9F, 0x00),
    Color32::from_rgb(0x80, 0x80, 0x80),
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_reading_stage_follows_the_counts() {
        let p = diffusor_trace::Progress::default();
        assert_eq!(reading_stage(&p), None, "size not known yet");
        p.set_total(400);
        assert_eq!(reading_stage(&p), Some(("reading the file", 0.0)));
        p.add_read(100);
        assert_eq!(reading_stage(&p), Some(("reading the file", 0.25)));
        p.add_read(300);
        assert_eq!(reading_stage(&p), Some(("parsing", 0.0)));
        p.add_parsed(400);
        assert_eq!(reading_stage(&p), Some(("checking the trace", 1.0)));
    }

    #[test]
    fn a_bound_field_tells_edits_from_what_the_program_wrote() {
        let mut f = BoundField::default();
        f.show_time(0.002_499_999_9);
        assert_eq!(f.text, "0.0025");
        assert_eq!(f.take_edit(), None);
        f.text = "0.5".to_owned();
        assert_eq!(f.take_edit(), Some(BoundChoice::At(0.5)));
        f.text = "auto".to_owned();
        assert_eq!(f.take_edit(), Some(BoundChoice::Auto));
        f.text = "-1".to_owned();
        assert_eq!(f.take_edit(), None);
        assert_eq!(
            f.error.as_deref(),
            Some("a time in seconds after the step, 0 or more")
        );
    }
}
