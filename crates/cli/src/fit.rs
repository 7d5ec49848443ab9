//! `diffusor fit`: the chosen model (the planar Cottrell analysis by default on a planar
//! electrode) fitted to every file, as a table, CSV or JSON (schema `diffusor.fit/1`).

use std::fmt::Write as _;
use std::io::IsTerminal;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{Context, bail};
use diffusor_fit::analysis::{ModelInputs, ModelKind, ModelResult, analyze_model};
use diffusor_fit::cell::{Cell, Geometry};
use diffusor_fit::models::kinetics::BackReaction;
use diffusor_fit::models::microdisk::DiskExpression;
use diffusor_fit::planar::{Background, PlanarOptions, PlanarResult};
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
    /// The model to fit. Default: cottrell for a planar electrode, microdisk for a microdisk,
    /// sphere for a sphere or hemisphere.
    #[arg(long, value_enum, value_name = "MODEL")]
    model: Option<ModelArg>,
    /// The disk expression of the microdisk model.
    #[arg(long, value_enum, default_value = "mahon-oldham", value_name = "FORM")]
    disk_form: DiskFormArg,
    /// Film thickness L for the slab model (default unit µm; also `800nm`, `1.2um`).
    #[arg(long = "film", value_name = "L")]
    film: Option<String>,
    /// The back reaction for the kinetic model: `irreversible`, or kb/kf at the stepped
    /// potential (a number ≥ 0).
    #[arg(long = "back-rate", value_name = "irreversible|KB/KF")]
    back_rate: Option<String>,
    /// D_R/D_O for the kinetic model's back reaction (used with a number for --back-rate).
    #[arg(long = "d-ratio", default_value_t = 1.0, value_name = "RATIO")]
    d_ratio: f64,
    /// The step height in V for Ru and Cdl in the cottrell-charging model (default: from the
    /// file's potential column).
    #[arg(long = "step-height", value_name = "VOLTS", allow_hyphen_values = true)]
    step_height: Option<f64>,
    /// The double-layer charge Q_dl for the adsorbed amount of the anson model (default unit
    /// µC; also `0.12+-0.01uC`, `2e-7C`).
    #[arg(long = "dl-charge", value_name = "Q")]
    dl_charge: Option<String>,
    /// Print JSON (schema `diffusor.fit/1`) instead of a table.
    #[arg(long, conflicts_with = "csv")]
    json: bool,
    /// Print one CSV row per run instead of a table (`report`: also write it beside the page,
    /// with the extension `.csv`).
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

/// The models, by the names `--model` takes (those of [`ModelKind::name`]).
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum ModelArg {
    Cottrell,
    CottrellCharging,
    Microdisk,
    Sphere,
    Kinetic,
    Anson,
    DoubleStep,
    Slab,
}

impl ModelArg {
    fn kind(self) -> ModelKind {
        match self {
            ModelArg::Cottrell => ModelKind::Cottrell,
            ModelArg::CottrellCharging => ModelKind::CottrellCharging,
            ModelArg::Microdisk => ModelKind::Microdisk,
            ModelArg::Sphere => ModelKind::Sphere,
            ModelArg::Kinetic => ModelKind::Kinetic,
            ModelArg::Anson => ModelKind::Anson,
            ModelArg::DoubleStep => ModelKind::DoubleStep,
            ModelArg::Slab => ModelKind::Slab,
        }
    }
}

#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum DiskFormArg {
    MahonOldham,
    ShoupSzabo,
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

    /// Whether CSV was asked for.
    pub fn csv_output(&self) -> bool {
        self.csv
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

    /// The model asked for (`None`: the geometry's default).
    pub fn model(&self) -> Option<ModelKind> {
        self.model.map(ModelArg::kind)
    }

    /// The models' extra inputs, validated.
    pub fn model_inputs(&self) -> anyhow::Result<ModelInputs> {
        let thickness_m = self
            .film
            .as_deref()
            .map(|t| quantity::parse(t, Kind::Length))
            .transpose()
            .map_err(|e| anyhow::anyhow!("--film: {e}"))?
            .map(|m| m.value);
        let back_reaction = match self.back_rate.as_deref() {
            None => None,
            Some("irreversible") => Some(BackReaction::Irreversible),
            Some(v) => {
                let ratio: f64 = v
                    .parse()
                    .ok()
                    .filter(|r: &f64| r.is_finite() && *r >= 0.0)
                    .with_context(|| {
                        format!("--back-rate: expected irreversible or kb/kf ≥ 0, found {v:?}")
                    })?;
                if !(self.d_ratio > 0.0 && self.d_ratio.is_finite()) {
                    bail!("--d-ratio: D_R/D_O must be positive, not {}", self.d_ratio);
                }
                Some(BackReaction::QuasiReversible {
                    kb_over_kf: ratio,
                    dr_over_do: self.d_ratio,
                })
            }
        };
        if let Some(v) = self.step_height
            && !(v.is_finite() && v != 0.0)
        {
            bail!("--step-height: expected a non-zero step in V, found {v}");
        }
        let double_layer_charge_c = self
            .dl_charge
            .as_deref()
            .map(|t| quantity::parse(t, Kind::Charge))
            .transpose()
            .map_err(|e| anyhow::anyhow!("--dl-charge: {e}"))?;
        Ok(ModelInputs {
            disk_expression: match self.disk_form {
                DiskFormArg::MahonOldham => DiskExpression::MahonOldham,
                DiskFormArg::ShoupSzabo => DiskExpression::ShoupSzabo,
            },
            back_reaction,
            thickness_m,
            step_v: self.step_height,
            double_layer_charge_c,
        })
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
    pub result: Result<ModelResult, String>,
}

/// What every file is fitted with.
pub struct Setup<'a> {
    pub cell: &'a Cell,
    pub options: &'a PlanarOptions,
    pub model: Option<ModelKind>,
    pub inputs: &'a ModelInputs,
}

/// Reads and fits every file in parallel, with a progress bar on a terminal.
pub fn fit_all(files: &[PathBuf], import: &ImportArgs, setup: &Setup<'_>) -> Vec<Run> {
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
                    analyze_model(
                        &trace,
                        &step,
                        setup.cell,
                        setup.options,
                        setup.model,
                        setup.inputs,
                    )
                    .map_err(|e| format!("{e}: {file}"))
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

/// The cell, options, model and model inputs of `args`, validated.
pub struct Validated {
    pub cell: Cell,
    pub options: PlanarOptions,
    pub model: Option<ModelKind>,
    pub inputs: ModelInputs,
}

impl Validated {
    /// Validates everything `args` say about the fit.
    pub fn of(args: &Args) -> anyhow::Result<Validated> {
        Ok(Validated {
            cell: args.cell()?,
            options: args.options()?,
            model: args.model(),
            inputs: args.model_inputs()?,
        })
    }

    /// What `fit_all` needs.
    pub fn setup(&self) -> Setup<'_> {
        Setup {
            cell: &self.cell,
            options: &self.options,
            model: self.model,
            inputs: &self.inputs,
        }
    }
}

fn csv_number(e: Option<f64>, scale: f64) -> String {
    e.map_or(String::new(), |v| (v * scale).to_string())
}

pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let v = Validated::of(args)?;
    let runs = fit_all(&args.files, &args.import, &v.setup());
    if args.json {
        println!("{}", document_text(&runs, &v.cell, None));
    } else if args.csv {
        print!("{}", csv(&runs));
    } else {
        print!("{}", table(&runs));
    }
    Ok(exit_status(&runs))
}

/// One CSV row per run. The columns after `error` were added with the model choice.
pub fn csv(runs: &[Run]) -> String {
    let mut out = String::from(
        "file,ok,D_cm2_s,D_std_error,D_ci95_lo,D_ci95_hi,nAC_mol_cm,area_cm2,window_lo_s,window_hi_s,points,t0_s,r2,residual_sd_A,error,model,C_mM\n",
    );
    for r in runs {
        let name = r.file.replace('"', "\"\"");
        match &r.result {
            Ok(f) => {
                let d = f.diffusion_m2_s;
                let t0 = f.planar().map_or(0.0, |p| p.t0.value);
                // The Anson model fits charge: its residual SD is in C, not a current.
                let sd = (f.fitted_quantity == "current").then_some(f.residual_sd);
                let _ = writeln!(
                    out,
                    "\"{name}\",true,{},{},{},{},{},{},{},{},{},{},{},{},,{},{}",
                    csv_number(d.map(|d| d.value), 1e4),
                    csv_number(d.map(|d| d.std_error), 1e4),
                    csv_number(d.map(|d| d.ci95[0]), 1e4),
                    csv_number(d.map(|d| d.ci95[1]), 1e4),
                    csv_number(f.nac_mol_m.map(|e| e.value), 1e-2),
                    csv_number(f.area_m2.map(|e| e.value), 1e4),
                    f.window.lo.time_s,
                    f.window.hi.time_s,
                    f.window.points,
                    t0,
                    f.r2,
                    sd.map_or(String::new(), |v| v.to_string()),
                    f.model.name(),
                    csv_number(f.conc_mol_m3.map(|e| e.value), 1.0),
                );
            }
            Err(e) => {
                let _ = writeln!(
                    out,
                    "\"{name}\",false,,,,,,,,,,,,,\"{}\",,",
                    e.replace('"', "\"\"")
                );
            }
        }
    }
    out
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
                match r.planar() {
                    Some(p) => planar_block(&mut out, p),
                    None => model_block(&mut out, r),
                }
                out.push('\n');
            }
        }
    }
    out
}

fn estimate_line(
    out: &mut String,
    label: &str,
    e: &diffusor_fit::planar::Estimate,
    scale: f64,
    unit: &str,
) {
    let _ = writeln!(
        out,
        "  {label:<10} {} {unit}  (standard error {}, 95 % interval {} … {})",
        sci(e.value * scale, 4),
        sci(e.std_error * scale, 2),
        sci(e.ci95[0] * scale, 4),
        sci(e.ci95[1] * scale, 4)
    );
}

/// A model other than Cottrell's: its answer, window, parameters, fit and warnings.
fn model_block(out: &mut String, r: &ModelResult) {
    let _ = writeln!(out, "  model      {} ({})", r.model.name(), r.variant);
    if let Some(d) = &r.diffusion_m2_s {
        estimate_line(out, "D", d, 1e4, "cm²/s");
    }
    if let Some(c) = &r.conc_mol_m3 {
        estimate_line(out, "C", c, 1.0, "mM");
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
            "  {:<10} {} {}  (± {}, 95 % {} … {})",
            p.symbol,
            sci(p.estimate.value, 5),
            p.unit,
            sci(p.estimate.std_error, 2),
            sci(p.estimate.ci95[0], 4),
            sci(p.estimate.ci95[1], 4)
        );
    }
    let (sd, unit) = if r.fitted_quantity == "charge" {
        (format_si(r.residual_sd, "C", 3), "charge")
    } else {
        (format_si(r.residual_sd, "A", 3), "current")
    };
    let _ = writeln!(
        out,
        "  fit        R² = {:.6} ({unit}), residual SD = {sd}, {} iterations{}",
        r.r2,
        r.iterations,
        if r.converged { "" } else { ", not converged" }
    );
    let _ = writeln!(
        out,
        "  validity   {} ({})",
        if r.in_validity_range {
            "the data lie in the model's range"
        } else {
            "the data leave the model's range"
        },
        r.validity_check
    );
    let _ = writeln!(out, "  equation   {}", r.equation);
    let _ = writeln!(out, "  source     {}", r.source);
    let _ = writeln!(out, "  chosen     {}", r.choice.reason);
    for w in &r.warnings {
        let _ = writeln!(out, "  warning    {w}");
    }
}

/// The planar analysis, as it always was printed.
fn planar_block(out: &mut String, r: &PlanarResult) {
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
}
