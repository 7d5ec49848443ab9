//! The versioned results document `diffusor.fit/1`: what `diffusor fit --json` prints, what
//! the report embeds, and what the desktop window exports, built by one pure function so the
//! three are the same bytes for the same inputs.
//!
//! SI inside the program; the document reports D in cm²/s, n·A·C in mol/cm, areas in cm² and
//! concentrations in mM (numerically mol/m³), as its key names say. Keys are only ever added
//! to this schema, never renamed or removed.

use diffusor_fit::analysis::ModelResult;
use diffusor_fit::cell::Cell;
use diffusor_fit::planar::{Estimate, Param, PlanarResult};
use diffusor_fit::replicates::ReplicateSummary;
use serde_json::{Value, json};

/// The schema name and version every document carries.
pub const SCHEMA: &str = "diffusor.fit/1";

/// One run as the document needs it.
#[derive(Debug, Clone, Copy)]
pub struct RunRecord<'a> {
    /// The file as the user named it.
    pub file: &'a str,
    /// SHA-256 of the file's bytes, in hex, when it could be read.
    pub sha256: Option<&'a str>,
    /// The analysis, or why there is none (as the user should see it).
    pub result: Result<&'a ModelResult, &'a str>,
}

/// An estimate in the document's unit: `scale` converts from SI (10⁴ for m²/s → cm²/s and
/// m² → cm², 10⁻² for mol/m → mol/cm).
fn estimate_json(e: Option<Estimate>, scale: f64) -> Value {
    match e {
        Some(e) => json!({
            "value": e.value * scale,
            "std_error": e.std_error * scale,
            "ci95": [e.ci95[0] * scale, e.ci95[1] * scale],
        }),
        None => Value::Null,
    }
}

fn params_json(params: &[Param]) -> Value {
    let map: serde_json::Map<String, Value> = params
        .iter()
        .map(|p| {
            (
                p.symbol.to_owned(),
                json!({
                    "name": p.name, "unit": p.unit, "value": p.estimate.value,
                    "std_error": p.estimate.std_error, "ci95": p.estimate.ci95,
                }),
            )
        })
        .collect();
    Value::Object(map)
}

/// One run of the document, for the cell every run was fitted with.
pub fn run_json(run: &RunRecord<'_>, cell: &Cell) -> Value {
    match run.result {
        Err(e) => json!({
            "file": run.file, "sha256": run.sha256, "ok": false, "error": e,
            "model": Value::Null, "geometry": cell.geometry.name(), "t0_s": Value::Null,
            "window_s": Value::Null, "window_reason": Value::Null, "points": 0,
            "D_cm2_s": Value::Null, "C_mM": Value::Null, "nAC_mol_cm": Value::Null,
            "area_cm2": Value::Null, "params": {}, "diagnostics": Value::Null, "warnings": [],
        }),
        Ok(m) => {
            let mut v = match m.planar() {
                Some(p) => planar_json(run, p, cell),
                None => model_json(run, m, cell),
            };
            // Keys added with the model choice; every run has them, after the planar ones.
            if let Value::Object(o) = &mut v {
                o.insert("model_option".to_owned(), json!(m.model.name()));
                o.insert("model_choice".to_owned(), json!(m.choice));
                o.insert("equation".to_owned(), json!(m.equation));
                o.insert("source".to_owned(), json!(m.source));
                o.insert("validity".to_owned(), json!(m.validity));
                o.insert("in_validity_range".to_owned(), json!(m.in_validity_range));
                o.insert("validity_check".to_owned(), json!(m.validity_check));
                if m.planar().is_none() {
                    o.insert("details".to_owned(), json!(m.details));
                }
            }
            v
        }
    }
}

/// A concentration: fitted when the model determines it, else as entered.
fn conc_json(fitted: Option<Estimate>, cell: &Cell) -> Value {
    match fitted {
        // mol/m³ is numerically mM.
        Some(e) => json!({
            "value": e.value, "std_error": e.std_error, "ci95": e.ci95, "entered": false,
        }),
        None => cell.conc_mol_m3.map_or(
            Value::Null,
            |c| json!({"value": c.value, "std_error": c.u, "ci95": Value::Null, "entered": true}),
        ),
    }
}

/// A model other than Cottrell's, in the keys the planar runs use where they apply.
fn model_json(run: &RunRecord<'_>, m: &ModelResult, cell: &Cell) -> Value {
    let sd_key = if m.fitted_quantity == "charge" {
        "residual_sd_C"
    } else {
        "residual_sd_A"
    };
    let mut diagnostics = serde_json::Map::new();
    diagnostics.insert("r2".to_owned(), json!(m.r2));
    diagnostics.insert(sd_key.to_owned(), json!(m.residual_sd));
    diagnostics.insert("fitted_quantity".to_owned(), json!(m.fitted_quantity));
    diagnostics.insert("degrees_of_freedom".to_owned(), json!(m.degrees_of_freedom));
    diagnostics.insert("iterations".to_owned(), json!(m.iterations));
    diagnostics.insert("converged".to_owned(), json!(m.converged));
    diagnostics.insert("termination".to_owned(), json!(m.termination));
    diagnostics.insert("correlations".to_owned(), json!(m.correlations));
    diagnostics.insert("background".to_owned(), json!(m.background));
    json!({
        "file": run.file,
        "sha256": run.sha256,
        "ok": true,
        "error": Value::Null,
        "model": m.variant,
        "geometry": m.geometry.name(),
        "mode": m.mode,
        // The planar analysis's refined onset, which the model's times start from.
        "t0_s": m.t0_s,
        "window_s": [m.window.lo.time_s, m.window.hi.time_s],
        "window_reason": {"lo": m.window.lo.description, "hi": m.window.hi.description},
        "window_automatic": {"lo": m.window.lo.automatic, "hi": m.window.hi.automatic},
        "points": m.points,
        "D_cm2_s": estimate_json(m.diffusion_m2_s, 1e4),
        "C_mM": conc_json(m.conc_mol_m3, cell),
        "nAC_mol_cm": estimate_json(m.nac_mol_m, 1e-2),
        "area_cm2": estimate_json(m.area_m2, 1e4),
        "params": params_json(&m.params),
        "budget": Value::Null,
        "charging": Value::Null,
        "diagnostics": Value::Object(diagnostics),
        "warnings": m.warnings,
    })
}

/// The planar analysis, in the keys the schema began with.
fn planar_json(run: &RunRecord<'_>, r: &PlanarResult, cell: &Cell) -> Value {
    let conc = cell
        .conc_mol_m3
        .map(|c| json!({"value": c.value, "std_error": c.u, "ci95": Value::Null, "entered": true}));
    json!({
        "file": run.file,
        "sha256": run.sha256,
        "ok": true,
        "error": Value::Null,
        "model": r.model,
        "geometry": r.geometry.name(),
        "mode": r.mode,
        "t0_s": r.t0.value,
        "window_s": [r.window.lo.time_s, r.window.hi.time_s],
        "window_reason": {"lo": r.window.lo.description, "hi": r.window.hi.description},
        "window_automatic": {"lo": r.window.lo.automatic, "hi": r.window.hi.automatic},
        "points": r.window.points,
        "D_cm2_s": estimate_json(r.diffusion_m2_s, 1e4),
        "C_mM": conc.unwrap_or(Value::Null),
        // mol/m → mol/cm: ×10⁻².
        "nAC_mol_cm": estimate_json(r.nac_mol_m, 1e-2),
        "area_cm2": estimate_json(r.area_m2, 1e4),
        "params": params_json(&r.params),
        "budget": r.budget,
        "charging": r.charging,
        "diagnostics": {
            "r2": r.diagnostics.r2,
            "residual_sd_A": r.diagnostics.residual_sd_a,
            "durbin_watson": r.diagnostics.durbin_watson,
            "lag1_autocorrelation": r.diagnostics.lag1_autocorrelation,
            "runs_z": r.diagnostics.runs_z,
            "effective_points": r.diagnostics.effective_points,
            "degrees_of_freedom": r.diagnostics.degrees_of_freedom,
            "se_inflation": r.diagnostics.se_inflation,
            "autocorrelation_method": r.diagnostics.autocorrelation_method,
            "weighting": r.diagnostics.weighting,
            "background": r.background,
            "convection_onset_s": r.plateau.rises_from_s,
        },
        "warnings": r.warnings.iter().map(|w| w.message.clone()).collect::<Vec<_>>(),
    })
}

/// The `replicates` object: which quantity was compared (`D` or `n·A·C`), its unit, and the
/// statistics or why there are none.
pub fn replicates_json(
    quantity: &str,
    unit: &str,
    summary: Result<&ReplicateSummary, &str>,
) -> Value {
    match summary {
        Ok(s) => json!({"quantity": quantity, "unit": unit, "summary": s}),
        Err(e) => json!({"quantity": quantity, "unit": unit, "error": e}),
    }
}

/// The whole document: `version` is the program's (as `0.1.0`), `runs` in the order given,
/// `replicates` from [`replicates_json`] when the runs were compared.
pub fn document(
    version: &str,
    runs: &[RunRecord<'_>],
    cell: &Cell,
    replicates: Option<Value>,
) -> Value {
    json!({
        "schema": SCHEMA,
        "version": version,
        "runs": runs.iter().map(|r| run_json(r, cell)).collect::<Vec<_>>(),
        "replicates": replicates.unwrap_or(Value::Null),
    })
}

/// [`document`] as the pretty-printed text the command line writes (no trailing newline).
pub fn document_text(
    version: &str,
    runs: &[RunRecord<'_>],
    cell: &Cell,
    replicates: Option<Value>,
) -> String {
    // A `Value` holds only strings, finite-or-null numbers, maps and arrays, which always
    // serialise; the fallback is unreachable but keeps unwrap out of library code.
    serde_json::to_string_pretty(&document(version, runs, cell, replicates))
        .unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"))
}
