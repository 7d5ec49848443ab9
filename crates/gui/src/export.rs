//! Files written from the window: the HTML report (made by [`diffusor_report::render`], the
//! same page `diffusor report` writes), the run in focus as CSV with its fit and residuals,
//! and the atomic write every saved file goes through.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use diffusor_fit::analysis::{ModelInputs, ModelResult};
use diffusor_fit::cell::Cell;
use diffusor_fit::planar::PlanarOptions;
use diffusor_report::json::{RunRecord, document_text, replicates_json};
use diffusor_report::{Outcome, ReportInput, RunInput, render, replicates};

use crate::runs::{FitView, Run, RunData};

/// What can be exported.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ExportKind {
    /// The self-contained HTML report of every run.
    #[default]
    Report,
    /// The run in focus: time, current, fitted current, residual and window flag.
    DataCsv,
    /// The results of every run as the `diffusor.fit/1` document.
    ResultsJson,
}

impl ExportKind {
    /// Every kind, in the order the export window lists them.
    pub const ALL: [ExportKind; 3] = [
        ExportKind::Report,
        ExportKind::ResultsJson,
        ExportKind::DataCsv,
    ];

    /// Its name in the export window.
    pub fn label(self) -> &'static str {
        match self {
            ExportKind::Report => "Report (HTML, every run)",
            ExportKind::DataCsv => "Data of the run in focus (CSV)",
            ExportKind::ResultsJson => "Results (JSON, diffusor.fit/1, every run)",
        }
    }

    /// The file extension it is written with.
    pub fn extension(self) -> &'static str {
        match self {
            ExportKind::Report => "html",
            ExportKind::DataCsv => "csv",
            ExportKind::ResultsJson => "json",
        }
    }

    /// A file name to start from.
    pub fn default_name(self) -> &'static str {
        match self {
            ExportKind::Report => "diffusor-report.html",
            ExportKind::DataCsv => "diffusor-run.csv",
            ExportKind::ResultsJson => "diffusor-results.json",
        }
    }
}

/// Writes `bytes` to `path` so that a reader never sees half a file: into a temporary file in
/// the same directory (a rename is atomic only within one file system), flushed to disk, then
/// renamed over the target.
///
/// # Errors
///
/// The message to show, ending with the path.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), String> {
    write_atomic_with(path, |f| f.write_all(bytes))
}

/// As [`write_atomic`], with the contents streamed by `fill` (a 10-million-row CSV is not
/// built in memory first).
///
/// # Errors
///
/// The message to show, ending with the path.
pub fn write_atomic_with(
    path: &Path,
    fill: impl FnOnce(&mut std::io::BufWriter<std::fs::File>) -> std::io::Result<()>,
) -> Result<(), String> {
    let shown = path.display();
    let Some(name) = path.file_name() else {
        return Err(format!("not a file name: {shown}"));
    };
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    if !dir.is_dir() {
        return Err(format!("no such folder: {}", dir.display()));
    }
    let tmp = dir.join(format!(
        ".{}.{}.tmp",
        name.to_string_lossy(),
        std::process::id()
    ));
    let result = (|| -> std::io::Result<()> {
        let file = std::fs::File::create(&tmp)?;
        let mut w = std::io::BufWriter::new(file);
        fill(&mut w)?;
        let file = w
            .into_inner()
            .map_err(std::io::IntoInnerError::into_error)?;
        file.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    result.map_err(|e| {
        // The temporary file is ours; a failure to remove it leaves only a hidden stray file.
        let _ = std::fs::remove_file(&tmp);
        format!("cannot write the file ({e}): {shown}")
    })
}

/// Makes sure `path` ends in `.ext`, adding it when the name has no extension at all.
pub fn with_extension(path: &Path, ext: &str) -> PathBuf {
    if path.extension().is_some() {
        path.to_path_buf()
    } else {
        path.with_extension(ext)
    }
}

fn now_utc() -> String {
    let now = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| i64::try_from(d.as_secs()).unwrap_or(i64::MAX));
    diffusor_report::utc_timestamp(now)
}

/// The HTML report of `runs` fitted with `cell` and `options` (the per-run windows are in each
/// result; those set by hand are listed in the report's import notes).
///
/// # Errors
///
/// When there is nothing to report yet.
pub fn report_html(runs: &[Run], cell: &Cell, options: &PlanarOptions) -> Result<String, String> {
    if runs.is_empty() {
        return Err("no runs to report: open a file first".to_owned());
    }
    let models = model_results(runs);
    let mut notes = Vec::new();
    let model_inputs = report_model_inputs(runs, &mut notes);
    let mut inputs = Vec::with_capacity(runs.len());
    for (run, model) in runs.iter().zip(&models) {
        for (what, col) in [
            ("time", &run.columns.time),
            ("current", &run.columns.current),
        ] {
            if !col.trim().is_empty() {
                notes.push(format!("{}: {what} column given: {}", run.name, col.trim()));
            }
        }
        if let Some(f) = run.fit_view() {
            let w = &f.result.window;
            if !(w.lo.automatic && w.hi.automatic) {
                notes.push(format!(
                    "{}: window set by hand in the window, {} s to {} s after the step",
                    run.name,
                    crate::format::plain(w.lo.time_s, 4),
                    crate::format::plain(w.hi.time_s, 4)
                ));
            }
        }
        inputs.push(run_input(run, model.as_ref()));
    }
    let unticked: Vec<&str> = runs
        .iter()
        .filter(|r| !r.selected)
        .map(|r| r.name.as_str())
        .collect();
    if !unticked.is_empty() && runs.len() > 1 {
        // The window's Replicates view compares the ticked runs only; the report holds them all.
        notes.push(format!(
            "the replicate comparison here covers every run; the window compared only the ticked ones (not ticked: {})",
            unticked.join(", ")
        ));
    }
    let generated = now_utc();
    // The same document the Results (JSON) export writes, embedded as `diffusor report` does.
    let results = results_document(runs, &models, &inputs, cell);
    Ok(render(&ReportInput {
        version: env!("CARGO_PKG_VERSION"),
        generated_utc: &generated,
        cell,
        options,
        model_inputs: &model_inputs,
        import_notes: &notes,
        runs: &inputs,
        results_json: Some(&results),
    }))
}

const NOT_FITTED: &str = "not fitted yet (the export was made while it was being read or fitted)";

/// The `diffusor.fit/1` text of `runs` (with `inputs` their report inputs, for the replicate
/// comparison the report shows).
fn results_document(
    runs: &[Run],
    models: &[Option<ModelResult>],
    inputs: &[RunInput<'_>],
    cell: &Cell,
) -> String {
    let records: Vec<RunRecord<'_>> = runs
        .iter()
        .zip(models)
        .map(|(run, model)| RunRecord {
            file: &run.name,
            sha256: run.data().and_then(|d| d.sha256.as_deref()),
            result: match (model, run.error()) {
                (Some(m), _) => Ok(m),
                (None, Some(e)) => Err(e),
                (None, None) => Err(NOT_FITTED),
            },
        })
        .collect();
    let reps = replicates(inputs).map(|rep| {
        replicates_json(
            rep.quantity,
            rep.unit,
            rep.summary.as_ref().map_err(String::as_str),
        )
    });
    document_text(env!("CARGO_PKG_VERSION"), &records, cell, reps)
}

/// The results of `runs` as the `diffusor.fit/1` document (what `diffusor fit --json` writes,
/// with the replicate comparison of the report), ending with a newline.
///
/// # Errors
///
/// When there is nothing to report yet.
pub fn results_json(runs: &[Run], cell: &Cell) -> Result<String, String> {
    if runs.is_empty() {
        return Err("no runs to report: open a file first".to_owned());
    }
    let models = model_results(runs);
    let inputs: Vec<RunInput<'_>> = runs
        .iter()
        .zip(&models)
        .map(|(run, model)| run_input(run, model.as_ref()))
        .collect();
    Ok(results_document(runs, &models, &inputs, cell) + "\n")
}

/// Each fitted run's result, whatever its model.
fn model_results(runs: &[Run]) -> Vec<Option<ModelResult>> {
    runs.iter()
        .map(|run| run.fit_view().map(|f| f.result.clone()))
        .collect()
}

/// The model entries the report's table shows: for each entry, the first fitted run whose
/// model reads it; a run whose entry differs gets a note of its own, so no run's entry goes
/// unreported.
fn report_model_inputs(runs: &[Run], notes: &mut Vec<String>) -> ModelInputs {
    use diffusor_fit::analysis::ModelKind as K;
    use diffusor_fit::models::kinetics::BackReaction;
    let mut merged = ModelInputs::default();
    let mut first: [Option<&str>; 4] = [None; 4];
    let words = |i: &ModelInputs, k: usize| -> String {
        match k {
            0 => crate::model_form::disk_name(i.disk_expression).to_owned(),
            1 => match i.back_reaction {
                Some(BackReaction::QuasiReversible {
                    kb_over_kf,
                    dr_over_do,
                }) => format!("kb/kf = {kb_over_kf}, D_R/D_O = {dr_over_do}"),
                _ => "none".to_owned(),
            },
            2 => i.thickness_m.map_or("not given".to_owned(), |l| {
                diffusor_trace::format_si(l, "m", 4)
            }),
            _ => i.step_v.map_or("from the file".to_owned(), |v| {
                diffusor_trace::format_si(v, "V", 4)
            }),
        }
    };
    const WHAT: [&str; 4] = [
        "disk expression",
        "back reaction",
        "film thickness",
        "step height",
    ];
    for run in runs {
        let (Some(f), Ok(i)) = (run.fit_view(), run.model.inputs()) else {
            continue;
        };
        let model = f.result.model;
        let uses = [
            model == K::Microdisk,
            model == K::Kinetic,
            model == K::Slab,
            model == K::CottrellCharging,
        ];
        for k in (0..4).filter(|&k| uses[k]) {
            match first[k] {
                None => {
                    first[k] = Some(&run.name);
                    match k {
                        0 => merged.disk_expression = i.disk_expression,
                        1 => merged.back_reaction = i.back_reaction,
                        2 => merged.thickness_m = i.thickness_m,
                        _ => merged.step_v = i.step_v,
                    }
                }
                Some(_) if words(&i, k) != words(&merged, k) => notes.push(format!(
                    "{}: {} {} (the table shows another run's)",
                    run.name,
                    WHAT[k],
                    words(&i, k)
                )),
                Some(_) => {}
            }
        }
    }
    merged
}

fn run_input<'a>(run: &'a Run, model: Option<&'a ModelResult>) -> RunInput<'a> {
    let outcome = match (run.data(), model, run.error()) {
        (Some(d), Some(m), _) => Outcome::Fitted {
            trace: &d.trace,
            segment: &d.step,
            result: m,
        },
        (d, _, Some(e)) => Outcome::Failed {
            trace: d.map(|d| &d.trace),
            error: e,
        },
        (d, _, None) => Outcome::Failed {
            trace: d.map(|d| &d.trace),
            error: NOT_FITTED,
        },
    };
    RunInput {
        label: &run.name,
        sha256: run.data().and_then(|d| d.sha256.as_deref()),
        outcome,
    }
}

/// Writes the analysed step of `data` with its fit as CSV: a commented preamble (file, hash,
/// sign, fit), a header with units, then one row per sample after the step.
///
/// # Errors
///
/// The writer's.
pub fn write_data_csv(
    w: &mut impl Write,
    name: &str,
    data: &RunData,
    fit: &FitView,
) -> std::io::Result<()> {
    let r = &fit.result;
    writeln!(w, "# Diffusor {}: {name}", env!("CARGO_PKG_VERSION"))?;
    if let Some(sha) = &data.sha256 {
        writeln!(w, "# sha256 of the file: {sha}")?;
    }
    writeln!(
        w,
        "# time after the step; current with the faradaic sign made positive{}",
        if data.sign_reversed {
            " (the file's current was negated)"
        } else {
            ""
        }
    )?;
    writeln!(
        w,
        "# fit: {}, t0 = {:e} s, window {:e} s to {:e} s",
        r.variant, r.t0_s, r.window.lo.time_s, r.window.hi.time_s
    )?;
    writeln!(w, "time_s,current_A,fitted_current_A,residual_A,in_window")?;
    let (lo, hi) = (r.window.lo.time_s, r.window.hi.time_s);
    for (k, (&t, &i)) in data.time_s.iter().zip(&data.current_a).enumerate() {
        let fitted = r.predict_a(t);
        let residual = fit.residual_a.get(k).copied().unwrap_or(f64::NAN);
        let inside = u8::from(t >= lo && t <= hi);
        // A sample at or before the fitted onset has no model value: the cells stay empty.
        if fitted.is_finite() {
            writeln!(w, "{t:e},{i:e},{fitted:e},{residual:e},{inside}")?;
        } else {
            writeln!(w, "{t:e},{i:e},,,{inside}")?;
        }
    }
    Ok(())
}

/// Writes the CSV of `run` to `path`.
///
/// # Errors
///
/// The message to show.
pub fn export_data_csv(run: &Run, path: &Path) -> Result<(), String> {
    let (Some(data), Some(fit)) = (run.data(), run.fit_view()) else {
        return Err(format!(
            "{} has no fit to export yet: wait for it, or fix what the Runs panel says about it",
            run.name
        ));
    };
    write_atomic_with(path, |w| write_data_csv(w, &run.name, data, fit))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_atomic_write_replaces_the_file_and_leaves_nothing_else() {
        let dir = tempfile::tempdir().expect("a temporary folder");
        let path = dir.path().join("out.txt");
        write_atomic(&path, b"first").expect("written");
        write_atomic(&path, b"second").expect("written again");
        assert_eq!(std::fs::read(&path).expect("read back"), b"second");
        let names: Vec<_> = std::fs::read_dir(dir.path())
            .expect("listed")
            .map(|e| e.expect("entry").file_name())
            .collect();
        assert_eq!(names, vec![std::ffi::OsString::from("out.txt")]);
    }

    #[test]
    fn writing_into_a_missing_folder_says_which() {
        let dir = tempfile::tempdir().expect("a temporary folder");
        let path = dir.path().join("nope").join("out.txt");
        let e = write_atomic(&path, b"x").expect_err("no folder");
        assert!(e.starts_with("no such folder: "), "{e}");
    }
}
