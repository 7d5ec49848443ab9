//! `diffusor report`: the analysis of every file, as `fit` does it, written as one
//! self-contained HTML page (see the `diffusor-report` crate).

use std::path::PathBuf;
use std::process::ExitCode;
use std::time::{SystemTime, UNIX_EPOCH};

use anyhow::{Context, bail};
use diffusor_report::json::replicates_json;
use diffusor_report::{Outcome, ReportInput, RunInput, render, replicates};
use diffusor_trace::{ImportOptions, OnsetChoice, Trace, import_bytes};
use rayon::prelude::*;
use sha2::{Digest, Sha256};

use crate::fit::{self, Run};
use crate::import_args::ImportArgs;

/// Arguments of `report`: those of `fit`, and where to write the page. `--csv` also writes the
/// per-run CSV of `fit --csv` beside the page (same name, `.csv`).
// clap names an argument group after the struct; `fit::Args` already has that name.
#[derive(Debug, clap::Args)]
#[group(id = "report-args")]
pub struct Args {
    #[command(flatten)]
    fit: fit::Args,
    /// Where to write the HTML report.
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    output: PathBuf,
}

/// The importer's settings that differ from its defaults, for the report's record.
fn import_notes(import: &ImportArgs) -> Vec<String> {
    let mut notes = Vec::new();
    for (what, col) in [
        ("time", &import.time_col),
        ("current", &import.current_col),
        ("potential", &import.potential_col),
        ("charge", &import.charge_col),
    ] {
        if let Some(c) = col {
            notes.push(format!("{what} column given: {c}"));
        }
    }
    for (what, unit) in [
        ("time", &import.time_unit),
        ("current", &import.current_unit),
        ("potential", &import.potential_unit),
    ] {
        if let Some(u) = unit {
            notes.push(format!("{what} unit given: {}", u.symbol));
        }
    }
    match import.step_at {
        OnsetChoice::Detect => {}
        OnsetChoice::FileClock => notes.push("step onset: the file's own clock kept".to_owned()),
        OnsetChoice::At(t) => notes.push(format!("step onset given: {t} s on the file's clock")),
    }
    notes
}

/// Reads a file again for its trace, which the plots and the processing log need (`fit_all`
/// keeps only the results). The bytes must be the ones that were fitted: their SHA-256 is
/// compared with the fit's.
fn reread(run: &Run, path: &std::path::Path, options: &ImportOptions) -> Result<Trace, String> {
    let bytes = std::fs::read(path)
        .map_err(|e| format!("cannot read the file again ({e}): {}", run.file))?;
    let sha = format!("{:x}", Sha256::digest(&bytes));
    if run.sha256.as_deref() != Some(sha.as_str()) {
        return Err(format!(
            "the file changed while the report was being made; run the report again: {}",
            run.file
        ));
    }
    import_bytes(&run.file, &bytes, options).map_err(|e| e.to_string())
}

pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    if args.fit.json_output() {
        bail!(
            "--json: report writes HTML (the same results as JSON are embedded in it); use fit --json for JSON alone"
        );
    }
    let v = fit::Validated::of(&args.fit)?;
    let files = args.fit.files();
    let runs = fit::fit_all(files, args.fit.import(), &v.setup());
    let import_options = args.fit.import().options();
    let traces: Vec<Result<Trace, String>> = files
        .par_iter()
        .zip(&runs)
        .map(|(path, run)| reread(run, path, &import_options))
        .collect();
    let steps: Vec<Option<diffusor_trace::Segment>> = traces
        .iter()
        .map(|t| t.as_ref().ok().and_then(|t| t.steps().next().cloned()))
        .collect();
    let inputs: Vec<RunInput<'_>> = runs
        .iter()
        .zip(&traces)
        .zip(&steps)
        .map(|((run, trace), step)| {
            let outcome = match (&run.result, trace, step) {
                (Ok(result), Ok(trace), Some(segment)) => Outcome::Fitted {
                    trace,
                    segment,
                    result,
                },
                (Err(error), trace, _) => Outcome::Failed {
                    trace: trace.as_ref().ok(),
                    error,
                },
                (Ok(_), Err(error), _) => Outcome::Failed { trace: None, error },
                (Ok(_), Ok(trace), None) => Outcome::Failed {
                    trace: Some(trace),
                    error: "no potential step found",
                },
            };
            RunInput {
                label: &run.file,
                sha256: run.sha256.as_deref(),
                outcome,
            }
        })
        .collect();
    let failed = inputs
        .iter()
        .filter(|r| matches!(r.outcome, Outcome::Failed { .. }))
        .count();

    // The same document `compare --json` prints, embedded for whoever wants the numbers.
    let replicates = replicates(&inputs).map(|rep| {
        replicates_json(
            rep.quantity,
            rep.unit,
            rep.summary.as_ref().map_err(String::as_str),
        )
    });
    let results = fit::document_text(&runs, &v.cell, replicates);
    let now = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| i64::try_from(d.as_secs()).unwrap_or(i64::MAX));
    let generated = diffusor_report::utc_timestamp(now);
    let notes = import_notes(args.fit.import());
    let page = render(&ReportInput {
        version: env!("CARGO_PKG_VERSION"),
        generated_utc: &generated,
        cell: &v.cell,
        options: &v.options,
        model_inputs: &v.inputs,
        import_notes: &notes,
        runs: &inputs,
        results_json: Some(&results),
    });
    std::fs::write(&args.output, &page)
        .with_context(|| format!("cannot write the report: {}", args.output.display()))?;
    println!(
        "wrote {}: {} run{}, {:.1} MB",
        args.output.display(),
        inputs.len(),
        if inputs.len() == 1 { "" } else { "s" },
        page.len() as f64 / 1e6
    );
    if args.fit.csv_output() {
        // The same rows `fit --csv` prints, beside the page.
        let path = args.output.with_extension("csv");
        std::fs::write(&path, fit::csv(&runs))
            .with_context(|| format!("cannot write the CSV: {}", path.display()))?;
        println!("wrote {}: one row per run", path.display());
    }
    if failed > 0 {
        eprintln!(
            "diffusor: {failed} of {} file{} could not be analysed (the report says why)",
            inputs.len(),
            if inputs.len() == 1 { "" } else { "s" }
        );
    }
    Ok(if failed > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}
