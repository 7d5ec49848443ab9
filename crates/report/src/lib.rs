//! The self-contained HTML report of a Diffusor analysis: one file a reviewer can open in any
//! browser, offline, and print to paper or PDF.
//!
//! [`render`] turns a [`ReportInput`] — the cell as entered, the fit options, and for each run
//! its [`Trace`], the analysed [`Segment`] and the [`ModelResult`] (or why it failed) — into
//! the page. A Cottrell run shows the whole planar analysis (Cottrell plot, I·√t, window
//! sensitivity, budget); any other model shows its equation, source, validity, parameters and
//! its fitted curve on the transient. It is pure: no files, no clock, no network; the caller passes the date and the
//! program version in, so the command line and the desktop window produce the same page.
//!
//! The page makes no network requests of any kind: the stylesheet is inline, the plots are
//! inline SVG drawn by this crate, the processed data are embedded as `data:` downloads, and
//! there is no script. Every piece of text that comes from the user or a file (file names,
//! preamble lines, column headers, warnings) is escaped by the templating (maud), never pasted
//! into markup. [`replicates`] is the replicate comparison the page shows, for callers that
//! also want it as data; [`json`] builds the versioned results document (`diffusor.fit/1`)
//! that the command line prints and the page embeds.
//!
//! ```
//! use diffusor_fit::analysis::{ModelInputs, analyze_model};
//! use diffusor_fit::cell::{Cell, Measured};
//! use diffusor_fit::planar::PlanarOptions;
//! use diffusor_report::{Outcome, ReportInput, RunInput, render};
//! use diffusor_trace::{ImportOptions, import_bytes};
//!
//! // A noise-free Cottrell transient, I = S/√t + b with S = 10 µA·s^½ and b = 20 nA, sampled
//! // every millisecond for 5 s after the step.
//! let mut csv = String::from("t (s),I (A)\n");
//! for k in 1..=5000 {
//!     let t = k as f64 * 1e-3;
//!     csv.push_str(&format!("{t},{}\n", 1e-5 / t.sqrt() + 2e-8));
//! }
//! let trace = import_bytes("example.csv", csv.as_bytes(), &ImportOptions::default())?;
//! let step = trace.steps().next().expect("one step").clone();
//! let cell = Cell {
//!     area_m2: Some(Measured::new(7.07e-6, 7e-8)),
//!     conc_mol_m3: Some(Measured::new(1.0, 0.01)),
//!     ..Cell::default()
//! };
//! let options = PlanarOptions::default();
//! let inputs = ModelInputs::default();
//! // No model named: the planar electrode's default, Cottrell.
//! let result = analyze_model(&trace, &step, &cell, &options, None, &inputs).expect("fits");
//! let runs = [RunInput {
//!     label: "example.csv",
//!     sha256: None,
//!     outcome: Outcome::Fitted { trace: &trace, segment: &step, result: &result },
//! }];
//! let page = render(&ReportInput {
//!     version: "0.1.0",
//!     generated_utc: "2026-01-01 00:00:00 UTC",
//!     cell: &cell,
//!     options: &options,
//!     model_inputs: &inputs,
//!     import_notes: &[],
//!     runs: &runs,
//!     results_json: None,
//! });
//! assert!(page.starts_with("<!DOCTYPE html>"));
//! assert!(page.contains("example.csv") && page.contains("<svg"));
//! assert!(!page.contains("<script"));
//! # Ok::<(), diffusor_trace::ImportError>(())
//! ```
#![deny(missing_docs)]

mod data;
mod decimate;
mod figures;
mod fmt;
mod html;
pub mod json;
mod svg;
mod ticks;

#[cfg(test)]
mod tests;

use diffusor_fit::analysis::{ModelInputs, ModelResult};
use diffusor_fit::cell::Cell;
use diffusor_fit::planar::PlanarOptions;
use diffusor_fit::replicates::{ReplicateSummary, RunEstimate, summarize};
use diffusor_trace::{Segment, Trace};

pub use data::MAX_CSV_ROWS;

/// Everything the report shows. Nothing here is read from disk or the clock by this crate.
#[derive(Debug, Clone, Copy)]
pub struct ReportInput<'a> {
    /// The program version, as `0.1.0`.
    pub version: &'a str,
    /// When the report was made, as it should be printed (the caller's clock, in UTC).
    pub generated_utc: &'a str,
    /// The cell and electrode as entered (SI, with standard uncertainties).
    pub cell: &'a Cell,
    /// The fit options every run used.
    pub options: &'a PlanarOptions,
    /// The models' extra inputs every run used (film thickness, back reaction, ...).
    pub model_inputs: &'a ModelInputs,
    /// The importer's settings that differ from its defaults, in words (one per line), as
    /// `time unit given: ms`.
    pub import_notes: &'a [String],
    /// The runs, in the order given.
    pub runs: &'a [RunInput<'a>],
    /// The same results as a machine-readable document (the command line's `diffusor.fit/1`
    /// JSON), offered as an embedded download when given.
    pub results_json: Option<&'a str>,
}

/// One file's run.
#[derive(Debug, Clone, Copy)]
pub struct RunInput<'a> {
    /// The file as the user named it.
    pub label: &'a str,
    /// SHA-256 of the file's bytes, in hex, when known.
    pub sha256: Option<&'a str>,
    /// What came of it.
    pub outcome: Outcome<'a>,
}

/// What came of a run.
#[derive(Debug, Clone, Copy)]
pub enum Outcome<'a> {
    /// The step was analysed.
    Fitted {
        /// The imported trace.
        trace: &'a Trace,
        /// The step segment that was analysed.
        segment: &'a Segment,
        /// The analysis.
        result: &'a ModelResult,
    },
    /// The file could not be read or analysed.
    Failed {
        /// The trace, when the file was read but the analysis failed.
        trace: Option<&'a Trace>,
        /// Why, as the user should see it.
        error: &'a str,
    },
}

/// The replicate comparison of the fitted runs.
#[derive(Debug, Clone)]
pub struct Replicates {
    /// What is compared: `D` (forward) or `n·A·C` (a known D was entered).
    pub quantity: &'static str,
    /// Its unit in the report and in [`RunEstimate::value`]: `cm²/s` or `mol/cm`.
    pub unit: &'static str,
    /// The runs that have the quantity, in order, with values in `unit`.
    pub estimates: Vec<RunEstimate>,
    /// For each estimate, its run's position in [`ReportInput::runs`] (from 0).
    pub run_index: Vec<usize>,
    /// The statistics, or why there are none (fewer than two runs with the quantity, say).
    pub summary: Result<ReplicateSummary, String>,
}

/// The replicate comparison of `runs`, as the report shows it; `None` for a single run.
pub fn replicates(runs: &[RunInput<'_>]) -> Option<Replicates> {
    if runs.len() < 2 {
        return None;
    }
    let fitted: Vec<(usize, &str, &ModelResult)> = runs
        .iter()
        .enumerate()
        .filter_map(|(k, r)| match r.outcome {
            Outcome::Fitted { result, .. } => Some((k, r.label, result)),
            Outcome::Failed { .. } => None,
        })
        .collect();
    let inverse = fitted.iter().any(|(_, _, r)| r.mode == "inverse");
    // mol/m → mol/cm is ×10⁻², m²/s → cm²/s is ×10⁴.
    let (quantity, unit, scale) = if inverse {
        ("n·A·C", "mol/cm", 1e-2)
    } else {
        ("D", "cm²/s", 1e4)
    };
    let mut estimates = Vec::new();
    let mut run_index = Vec::new();
    for (k, label, r) in fitted {
        let e = if inverse {
            r.nac_mol_m
        } else {
            r.diffusion_m2_s
        };
        if let Some(e) = e {
            estimates.push(RunEstimate {
                label: label.to_owned(),
                value: e.value * scale,
                std_error: e.std_error * scale,
            });
            run_index.push(k);
        }
    }
    let summary = summarize(&estimates).map_err(|e| e.to_string());
    Some(Replicates {
        quantity,
        unit,
        estimates,
        run_index,
        summary,
    })
}

/// The report as one HTML document.
pub fn render(input: &ReportInput<'_>) -> String {
    html::document(input).into_string()
}

/// A time since the Unix epoch as `YYYY-MM-DD hh:mm:ss UTC`, by the proleptic Gregorian
/// calendar (the civil-from-days algorithm of H. Hinnant, "chrono-Compatible Low-Level Date
/// Algorithms", 2013). The caller reads the clock; this crate stays pure.
pub fn utc_timestamp(seconds: i64) -> String {
    let days = seconds.div_euclid(86_400);
    let secs = seconds.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02} {:02}:{:02}:{:02} UTC",
        secs / 3600,
        secs % 3600 / 60,
        secs % 60
    )
}

#[cfg(test)]
mod timestamp_tests {
    use super::utc_timestamp;

    #[test]
    fn timestamps_are_utc_civil_dates() {
        // The epoch; 2000-02-29 is day 11 016 (a leap day in a century year divisible by 400);
        // 1 700 000 000 s is 2023-11-14 22:13:20 UTC; one second before the epoch.
        assert_eq!(utc_timestamp(0), "1970-01-01 00:00:00 UTC");
        assert_eq!(utc_timestamp(11_016 * 86_400), "2000-02-29 00:00:00 UTC");
        assert_eq!(utc_timestamp(1_700_000_000), "2023-11-14 22:13:20 UTC");
        assert_eq!(utc_timestamp(-1), "1969-12-31 23:59:59 UTC");
        // 2100 is not a leap year: the day after 28 February is 1 March.
        assert_eq!(utc_timestamp(4_107_542_400), "2100-03-01 00:00:00 UTC");
    }
}
