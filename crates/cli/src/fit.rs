//! `diffusor fit`: the planar Cottrell analysis of every file, as a table or as JSON
//! (schema `diffusor.fit/1`).

use std::fmt::Write as _;
use std::io::IsTerminal;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{Context, bail};
use diffusor_fit::cell::{Cell, Geometry};
use diffusor_fit::planar::{Background, PlanarOptions, PlanarResult, analyze};
use diffusor_fit::window::BoundChoice;
use diffusor_report::json::{self, RunRecord};
use diffusor_trace::{format_si, import_path};
use rayon::prelude::*;
use serde_json::Value;
use sha2::{Digest, Sha256};

use crate::import_args::ImportArgs;
use crate::quantity::{self, Kind};

/// Arguments of `fit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Files to fit.
    #[arg(required = true, value_name = "FILE")]
    files: Vec<PathBuf>,
    /// Electrons transferred per molecule.
    #[arg(long, default_value_t = 1.0)]
    n: f64,
    /// Electroactive area (default unit cm²; also `7.07mm2`, `0.0707+-0.0010cm2`).
    #[arg(long, value_name = "AREA")]
    area: Option<String>,
    /// Electrode radius (default unit µm; also `5um`, `0.5mm`, with `+-` for its uncertainty).
    #[arg(long, value_name = "R", conflicts_with = "diameter")]
    radius: Option<String>,
    /// Electrode diameter (default unit µm).
    #[arg(long, value_name = "D")]
    diameter: Option<String>,
    /// Electrode geometry.
    #[arg(long, value_enum, default_value = "planar")]
    geometry: GeometryArg,
    /// Bulk concentration (default unit mM; also `2mM`, `2e-6mol/cm3`).
    #[arg(long, value_name = "C")]
    conc: Option<String>,
    /// A known diffusion coefficient (default unit cm²/s): report n·A·C and the area instead.
    #[arg(long = "D", value_name = "D")]
    known_d: Option<String>,
    /// The fitting window: `auto`, or `LO..HI` in seconds after the step (either side may be
    /// `auto`, as in `0.01..auto`).
    #[arg(long, default_value = "auto")]
    window: String,
    /// What to subtract first: `none`, `baseline` (the pre-step mean) or a current in A.
    #[arg(long, default_value = "none")]
    background: String,
    /// Do not fit an intercept (constant background current).
    #[arg(long)]
    no_intercept: bool,
    /// Keep the importer's step onset instead of refining t0 in the fit.
    #[arg(long)]
    fixed_onset: bool,
    /// Print JSON (schema `diffusor.fit/1`) instead of a table.
    #[arg(long, conflicts_with = "csv")]
    json: bool,
    /// Print one CSV row per run instead of a table.
    #[arg(long)]
    csv: bool,
    #[command(flatten)]
    import: ImportArgs,
}

#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum GeometryArg {
    Planar,
    Microdisk,
    Sphere,
    Hemisphere,
}

fn bound(text: &str) -> Result<BoundChoice, String> {
    if text == "auto" {
        return Ok(BoundChoice::Auto);
    }
    text.parse::<f64>()
        .ok()
        .filter(|v| v.is_finite() && *v >= 0.0)
        .map(BoundChoice::At)
        .ok_or_else(|| format!("expected a time in seconds or auto, found {text:?}"))
}

impl Args {
    /// The files named.
    pub fn files(&self) -> &[PathBuf] {
        &self.files
    }

    /// The importer's options.
    pub fn import(&self) -> &ImportArgs {
        &self.import
    }

    /// Whether JSON was asked for.
    pub fn json_output(&self) -> bool {
        self.json
    }

    /// The validated cell.
    pub fn cell(&self) -> anyhow::Result<Cell> {
        let parse = |text: &Option<String>, kind, what: &str| -> anyhow::Result<_> {
            text.as_deref()
                .map(|t| quantity::parse(t, kind))
                .transpose()
                .map_err(|e| anyhow::anyhow!("--{what}: {e}"))
        };
        let mut radius = parse(&self.radius, Kind::Length, "radius")?;
        if let Some(d) = parse(&self.diameter, Kind::Length, "diameter")? {
            radius = Some(diffusor_fit::cell::Measured::new(d.value / 2.0, d.u / 2.0));
        }
        let cell = Cell {
            n: self.n,
            geometry: match self.geometry {
                GeometryArg::Planar => Geometry::Planar,
                GeometryArg::Microdisk => Geometry::Microdisk,
                GeometryArg::Sphere => Geometry::Sphere,
                GeometryArg::Hemisphere => Geometry::Hemisphere,
            },
            area_m2: parse(&self.area, Kind::Area, "area")?,
            radius_m: radius,
            conc_mol_m3: parse(&self.conc, Kind::Concentration, "conc")?,
            known_d_m2_s: parse(&self.known_d, Kind::Diffusion, "D")?,
            temperature_k: None,
        };
        cell.validate().map_err(|e| anyhow::anyhow!("{e}"))?;
        Ok(cell)
    }

    /// The validated fit options.
    pub fn options(&self) -> anyhow::Result<PlanarOptions> {
        let mut o = PlanarOptions {
            intercept: !self.no_intercept,
            refine_t0: !self.fixed_onset,
            ..PlanarOptions::default()
        };
        if self.window != "auto" {
            let Some((lo, hi)) = self.window.split_once("..") else {
                bail!(
                    "--window: expected auto or LO..HI in seconds, found {:?}",
                    self.window
                );
            };
            o.window.lo = bound(lo.trim()).map_err(|e| anyhow::anyhow!("--window: {e}"))?;
            o.window.hi = bound(hi.trim()).map_err(|e| anyhow::anyhow!("--window: {e}"))?;
        }
        o.background = match self.background.as_str() {
            "none" => Background::None,
            "baseline" => Background::Baseline,
            v => Background::Constant {
                current_a: v.parse().with_context(|| {
                    format!("--background: expected none, baseline or a current in A, found {v:?}")
                })?,
            },
        };
        Ok(o)
    }
}

/// One file's outcome.
pub struct Run {
    pub file: String,
    pub sha256: Option<String>,
    pub result: Result<PlanarResult, String>,
}

/// Reads and fits every file in parallel, with a progress bar on a terminal.
pub fn fit_all(
    files: &[PathBuf],
    import: &ImportArgs,
    cell: &Cell,
    options: &PlanarOptions,
) -> Vec<Run> {
    let import_options = import.options();
    let bar = (std::io::stderr().is_terminal() && files.len() > 1)
        .then(|| indicatif::ProgressBar::new(files.len() as u64));
    let runs: Vec<Run> = files
        .par_iter()
        .map(|path| {
            let file = path.display().to_string();
            let sha256 = std::fs::read(path)
                .ok()
                .map(|bytes| format!("{:x}", Sha256::digest(&bytes)));
            let result = import_path(path, &import_options)
                .map_err(|e| e.to_string())
                .and_then(|trace| {
                    let step = trace
                        .steps()
                        .next()
                        .cloned()
                        .ok_or_else(|| format!("no potential step found: {file}"))?;
                    analyze(&trace, &step, cell, options).map_err(|e| format!("{e}: {file}"))
                });
            if let Some(b) = &bar {
                b.inc(1);
            }
            Run {
                file,
                sha256,
                result,
            }
        })
        .collect();
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    runs
}

impl Run {
    /// The run as the results document needs it.
    pub fn record(&self) -> RunRecord<'_> {
        RunRecord {
            file: &self.file,
            sha256: self.sha256.as_deref(),
            result: self.result.as_ref().map_err(String::as_str),
        }
    }
}

/// The runs as `diffusor.fit/1` text, with `replicates` when they were compared.
pub fn document_text(runs: &[Run], cell: &Cell, replicates: Option<Value>) -> String {
    let records: Vec<RunRecord<'_>> = runs.iter().map(Run::record).collect();
    json::document_text(env!("CARGO_PKG_VERSION"), &records, cell, replicates)
}

fn sci(v: f64, digits: usize) -> String {
    format!("{v:.digits$e}")
}

pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let cell = args.cell()?;
    let options = args.options()?;
    let runs = fit_all(&args.files, &args.import, &cell, &options);
    if args.json {
        println!("{}", document_text(&runs, &cell, None));
    } else if args.csv {
        let mut out = String::from(
            "file,ok,D_cm2_s,D_std_error,D_ci95_lo,D_ci95_hi,nAC_mol_cm,area_cm2,window_lo_s,window_hi_s,points,t0_s,r2,residual_sd_A,error\n",
        );
        for r in &runs {
            let name = r.file.replace('"', "\"\"");
            match &r.result {
                Ok(f) => {
                    let d = f.diffusion_m2_s;
                    let _ = writeln!(
                        out,
                        "\"{name}\",true,{},{},{},{},{},{},{},{},{},{},{},{},",
                        d.map_or(String::new(), |d| (d.value * 1e4).to_string()),
                        d.map_or(String::new(), |d| (d.std_error * 1e4).to_string()),
                        d.map_or(String::new(), |d| (d.ci95[0] * 1e4).to_string()),
                        d.map_or(String::new(), |d| (d.ci95[1] * 1e4).to_string()),
                        f.nac_mol_m
                            .map_or(String::new(), |e| (e.value * 1e-2).to_string()),
                        f.area_m2
                            .map_or(String::new(), |e| (e.value * 1e4).to_string()),
                        f.window.lo.time_s,
                        f.window.hi.time_s,
                        f.window.points,
                        f.t0.value,
                        f.diagnostics.r2,
                        f.diagnostics.residual_sd_a
                    );
                }
                Err(e) => {
                    let _ = writeln!(
                        out,
                        "\"{name}\",false,,,,,,,,,,,,,\"{}\"",
                        e.replace('"', "\"\"")
                    );
                }
            }
        }
        print!("{out}");
    } else {
        print!("{}", table(&runs));
    }
    Ok(exit_status(&runs))
}

/// Says on stderr how many files failed; exit status 1 when any did, else 0.
pub fn exit_status(runs: &[Run]) -> ExitCode {
    let failed = runs.iter().filter(|r| r.result.is_err()).count();
    if failed == 0 {
        return ExitCode::SUCCESS;
    }
    eprintln!(
        "diffusor: {failed} of {} file{} could not be fitted",
        runs.len(),
        if runs.len() == 1 { "" } else { "s" }
    );
    ExitCode::from(1)
}

/// The readable table: one block per run.
pub fn table(runs: &[Run]) -> String {
    let mut out = String::new();
    for run in runs {
        let _ = writeln!(out, "{}", run.file);
        match &run.result {
            Err(e) => {
                let _ = writeln!(out, "  error      {e}\n");
            }
            Ok(r) => {
                if let Some(d) = r.diffusion_m2_s {
                    let _ = writeln!(
                        out,
                        "  D          {} cm²/s  (standard error {}, 95 % interval {} … {})",
                        sci(d.value * 1e4, 4),
                        sci(d.std_error * 1e4, 2),
                        sci(d.ci95[0] * 1e4, 4),
                        sci(d.ci95[1] * 1e4, 4)
                    );
                }
                if let Some(b) = &r.budget {
                    // m²/s and m² both become cm-based by ×10⁴; mol/m becomes mol/cm by ×10⁻².
                    let (scale, unit) = match b.quantity {
                        "D" => (1e4, "cm²/s"),
                        "A" => (1e4, "cm²"),
                        _ => (1e-2, "mol/cm"),
                    };
                    let shares: Vec<String> = b
                        .entries
                        .iter()
                        .map(|e| format!("{} {:.0} %", e.input, e.share_percent))
                        .collect();
                    let _ = writeln!(
                        out,
                        "  U (k = 2)  {} {unit} with the inputs' uncertainties ({})",
                        sci(b.expanded_uncertainty * scale, 2),
                        shares.join(", ")
                    );
                }
                if let Some(e) = r.nac_mol_m {
                    let _ = writeln!(
                        out,
                        "  n·A·C      {} mol/cm  (95 % interval {} … {})",
                        sci(e.value * 1e-2, 4),
                        sci(e.ci95[0] * 1e-2, 4),
                        sci(e.ci95[1] * 1e-2, 4)
                    );
                }
                if let Some(e) = r.area_m2 {
                    let _ = writeln!(
                        out,
                        "  area       {} cm²  (95 % interval {} … {})",
                        sci(e.value * 1e4, 4),
                        sci(e.ci95[0] * 1e4, 4),
                        sci(e.ci95[1] * 1e4, 4)
                    );
                }
                let _ = writeln!(
                    out,
                    "  window     {} to {}, {} points",
                    format_si(r.window.lo.time_s, "s", 3),
                    format_si(r.window.hi.time_s, "s", 3),
                    r.window.points
                );
                let _ = writeln!(out, "    from     {}", r.window.lo.description);
                let _ = writeln!(out, "    to       {}", r.window.hi.description);
                for p in &r.params {
                    let _ = writeln!(
                        out,
                        "  {:<10} {} {}  (± {})",
                        p.symbol,
                        sci(p.estimate.value, 5),
                        p.unit,
                        sci(p.estimate.std_error, 2)
                    );
                }
                let _ = writeln!(
                    out,
                    "  fit        R² = {:.6}, residual SD = {}, Durbin–Watson = {:.2}",
                    r.diagnostics.r2,
                    format_si(r.diagnostics.residual_sd_a, "A", 3),
                    r.diagnostics.durbin_watson
                );
                for w in &r.warnings {
                    let _ = writeln!(out, "  warning    {}", w.message);
                }
                out.push('\n');
            }
        }
    }
    out
}
