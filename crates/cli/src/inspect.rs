//! `diffusor inspect`: what the importer found in each file.

use std::fmt::Write as _;
use std::path::PathBuf;
use std::process::ExitCode;

use diffusor_trace::{
    ColumnInfo, DecimalMark, Dialect, OnsetMethod, Polarity, Provenance, SegmentKind, Trace,
    format_si, import_path,
};
use serde::Serialize;

use crate::import_args::ImportArgs;

/// Arguments of `inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Files to read.
    #[arg(required = true, value_name = "FILE")]
    files: Vec<PathBuf>,
    /// Print JSON (schema `diffusor.inspect/1`) instead of text.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    import: ImportArgs,
}

/// One file's summary, as JSON.
#[derive(Debug, Serialize)]
struct FileReport<'a> {
    file: String,
    ok: bool,
    error: Option<String>,
    #[serde(flatten)]
    trace: Option<TraceSummary<'a>>,
}

#[derive(Debug, Serialize)]
struct TraceSummary<'a> {
    dialect: &'a Dialect,
    columns: &'a [ColumnInfo],
    rows: usize,
    time_span_s: [f64; 2],
    sampling_interval_s: f64,
    onset: &'a diffusor_trace::Onset,
    polarity: Option<Polarity>,
    segments: &'a [diffusor_trace::Segment],
    baseline: Option<&'a diffusor_trace::Baseline>,
    metadata: &'a [diffusor_trace::MetadataLine],
    warnings: &'a [diffusor_trace::ImportWarning],
}

fn summary(t: &Trace) -> TraceSummary<'_> {
    TraceSummary {
        dialect: &t.dialect,
        columns: &t.columns,
        rows: t.rows(),
        time_span_s: [
            t.time_s.first().copied().unwrap_or(f64::NAN),
            t.time_s.last().copied().unwrap_or(f64::NAN),
        ],
        sampling_interval_s: t.sampling_interval_s(),
        onset: &t.onset,
        polarity: t.polarity,
        segments: &t.segments,
        baseline: t.baseline.as_ref(),
        metadata: &t.metadata,
        warnings: &t.warnings,
    }
}

pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let options = args.import.options();
    let results: Vec<(String, Result<Trace, String>)> = args
        .files
        .iter()
        .map(|p| {
            (
                p.display().to_string(),
                import_path(p, &options).map_err(|e| e.to_string()),
            )
        })
        .collect();
    let failed = results.iter().filter(|(_, r)| r.is_err()).count();
    if args.json {
        let files: Vec<FileReport> = results
            .iter()
            .map(|(file, r)| FileReport {
                file: file.clone(),
                ok: r.is_ok(),
                error: r.as_ref().err().cloned(),
                trace: r.as_ref().ok().map(summary),
            })
            .collect();
        let doc = serde_json::json!({
            "schema": "diffusor.inspect/1",
            "version": env!("CARGO_PKG_VERSION"),
            "files": files,
        });
        println!("{}", serde_json::to_string_pretty(&doc)?);
    } else {
        let mut out = String::new();
        for (file, r) in &results {
            match r {
                Ok(t) => text_report(&mut out, t),
                Err(e) => {
                    let _ = writeln!(out, "{file}\n  error       {e}\n");
                }
            }
        }
        print!("{out}");
        if failed > 0 {
            eprintln!(
                "diffusor: {failed} of {} file{} could not be read",
                results.len(),
                if results.len() == 1 { "" } else { "s" }
            );
        }
    }
    Ok(if failed > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    })
}

fn dialect_line(d: &Dialect) -> String {
    let mut s = format!(
        "{}-separated, decimal {}, {}, {} line endings",
        d.delimiter.name(),
        match d.decimal {
            DecimalMark::Point => "point",
            DecimalMark::Comma => "comma",
        },
        d.encoding.name(),
        d.line_ending.name()
    );
    if d.quoted {
        s.push_str(", quoted");
    }
    match d.header_line {
        Some(h) => {
            let _ = write!(s, ", header on line {h}");
        }
        None => s.push_str(", no header"),
    }
    if let Some(u) = d.units_line {
        let _ = write!(s, ", units on line {u}");
    }
    s
}

fn column_line(c: &ColumnInfo) -> String {
    let label = if c.header.is_empty() {
        format!("{}", c.number)
    } else {
        format!("{} {:?}", c.number, c.header)
    };
    match (&c.role, &c.unit) {
        (Some(role), Some(unit)) => {
            let mut s = format!("{label} → {} in {}", role.name(), unit.symbol);
            if unit.to_si != 1.0 {
                let _ = write!(s, " (× {:e} to {})", unit.to_si, role.si_symbol());
            }
            if c.role_provenance != Provenance::Header {
                let _ = write!(s, ", role {:?}", c.role_provenance);
            }
            if c.unit_provenance != Provenance::Header {
                let _ = write!(s, ", unit {:?}", c.unit_provenance);
            }
            s
        }
        _ => format!("{label} → not used"),
    }
}

fn text_report(out: &mut String, t: &Trace) {
    let _ = writeln!(out, "{}", t.file);
    let _ = writeln!(out, "  dialect     {}", dialect_line(&t.dialect));
    for (k, c) in t.columns.iter().enumerate() {
        let head = if k == 0 {
            "  columns     "
        } else {
            "              "
        };
        let _ = writeln!(out, "{head}{}", column_line(c));
    }
    let _ = writeln!(
        out,
        "  rows        {} (from line {})",
        t.rows(),
        t.dialect.first_data_line
    );
    let (first, last) = (t.time_s[0], t.time_s[t.rows() - 1]);
    let _ = writeln!(
        out,
        "  time        {} to {} after the step, sampled every {}",
        format_si(first, "s", 4),
        format_si(last, "s", 4),
        format_si(t.sampling_interval_s(), "s", 3)
    );
    let how = match &t.onset.method {
        OnsetMethod::PotentialJump { from_v, to_v } => format!(
            "potential jump {} → {}",
            format_si(*from_v, "V", 3),
            format_si(*to_v, "V", 3)
        ),
        OnsetMethod::CurrentJump => "current jump".to_owned(),
        OnsetMethod::FileStart => "file starts at the step; its clock kept".to_owned(),
        OnsetMethod::AssumedOneSampleBefore => {
            "assumed one sampling interval before the first sample".to_owned()
        }
        OnsetMethod::Given => "given".to_owned(),
    };
    let _ = writeln!(
        out,
        "  step onset  {} on the file clock ({how}), sample {}",
        format_si(t.onset.file_time_s, "s", 4),
        t.onset.index + 1
    );
    let sign = match t.polarity {
        Some(Polarity::Anodic) => "anodic (positive current, oxidation; IUPAC sign)",
        Some(Polarity::Cathodic) => "cathodic (negative current, reduction; IUPAC sign)",
        None => "undetermined (no net current)",
    };
    let _ = writeln!(out, "  sign        {sign}");
    let mut step = 0;
    for (k, s) in t.segments.iter().enumerate() {
        let head = if k == 0 {
            "  segments    "
        } else {
            "              "
        };
        let name = match s.kind {
            SegmentKind::Baseline => "baseline".to_owned(),
            SegmentKind::Step => {
                step += 1;
                format!("step {step}")
            }
        };
        let at = s
            .potential_v
            .map(|v| format!(" at {}", format_si(v, "V", 3)))
            .unwrap_or_default();
        let _ = writeln!(
            out,
            "{head}{name}: samples {}–{} ({}){at}",
            s.start + 1,
            s.end,
            s.len()
        );
    }
    match &t.baseline {
        Some(b) => {
            let _ = writeln!(
                out,
                "  baseline    mean {}, sd {} over {} samples",
                format_si(b.mean_a, "A", 3),
                format_si(b.sd_a, "A", 2),
                b.points
            );
        }
        None => {
            let _ = writeln!(out, "  baseline    none (no samples before the step)");
        }
    }
    for (k, m) in t.metadata.iter().enumerate() {
        let head = if k == 0 {
            "  metadata    "
        } else {
            "              "
        };
        let text = match &m.key {
            Some(key) => format!("{key} = {}", m.value),
            None => m.value.clone(),
        };
        let _ = writeln!(out, "{head}line {}: {text}", m.line);
    }
    if t.warnings.is_empty() {
        let _ = writeln!(out, "  warnings    none");
    }
    for (k, w) in t.warnings.iter().enumerate() {
        let head = if k == 0 {
            "  warnings    "
        } else {
            "              "
        };
        let _ = writeln!(out, "{head}{}", w.message);
    }
    out.push('\n');
}
