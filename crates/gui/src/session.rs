//! The session file (`diffusor.session/1`): what a reviewer needs to reopen exactly what was
//! seen — each run's file and SHA-256, the cell entries as typed, the fit choices, each run's
//! window (automatic or the bounds set by hand) and model. JSON, written atomically.
//!
//! Reading is strict and all-or-nothing: [`parse`] either returns a complete [`Session`] or a
//! message, so the window's state is replaced only by a file that was read in full.

use diffusor_fit::analysis::ModelKind;
use diffusor_fit::cell::Geometry;
use serde::{Deserialize, Serialize};

use crate::cell_form::{CellForm, FitChoices, QuantityField, SizeKind};
use crate::model_form::{self, ModelFields};
use crate::units::{TemperatureUnit, UncertaintyMode, UnitChoice};

/// The schema this version writes and reads.
pub const SCHEMA: &str = "diffusor.session/1";
/// The schema's family; the number after the slash is its version.
const FAMILY: &str = "diffusor.session/";
/// The version number of [`SCHEMA`].
const VERSION: u64 = 1;

/// The model of a run left to the engine (the default for the cell's geometry).
pub const GEOMETRY_DEFAULT: &str = "geometry-default";
/// What sessions saved before the window offered other models call the planar model (the
/// name `diffusor.fit/1` gives the Cottrell analysis); they fitted nothing else.
const EARLIER_PLANAR: &str = "planar-cottrell";

/// The session's name for a run's model choice: [`GEOMETRY_DEFAULT`] or the command line's
/// name ([`ModelKind::name`]).
pub fn model_name(kind: Option<ModelKind>) -> &'static str {
    kind.map_or(GEOMETRY_DEFAULT, ModelKind::name)
}

/// The model choice a session names.
///
/// # Errors
///
/// For a name this version does not know, the message to show beside the run.
pub fn model_kind(name: &str) -> Result<Option<ModelKind>, String> {
    match name {
        GEOMETRY_DEFAULT => Ok(None),
        EARLIER_PLANAR => Ok(Some(ModelKind::Cottrell)),
        other => ModelKind::from_name(other).map(Some).ok_or_else(|| {
            format!(
                "saved with the model “{other}”, which this version does not offer: fitted with the default for the geometry"
            )
        }),
    }
}

/// A run's model entries as typed (see [`ModelFields`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct ModelEntries {
    /// `mahon-oldham` or `shoup-szabo`.
    pub disk_expression: String,
    /// Whether the kinetic model's back reaction is negligible.
    pub irreversible: bool,
    /// kb/kf, as typed.
    pub kb_over_kf: String,
    /// D_R/D_O, as typed.
    pub dr_over_do: String,
    /// Film thickness in µm, as typed.
    pub thickness_um: String,
    /// Step height in mV, as typed.
    pub step_mv: String,
}

impl Default for ModelEntries {
    fn default() -> Self {
        ModelEntries::of(&ModelFields::default())
    }
}

impl ModelEntries {
    /// The entries of `fields`, without the choice of model (saved beside them).
    pub fn of(fields: &ModelFields) -> ModelEntries {
        ModelEntries {
            disk_expression: model_form::disk_name(fields.disk).to_owned(),
            irreversible: fields.irreversible,
            kb_over_kf: fields.kb_over_kf.clone(),
            dr_over_do: fields.dr_over_do.clone(),
            thickness_um: fields.thickness_um.clone(),
            step_mv: fields.step_mv.clone(),
        }
    }

    /// The fields these entries describe, with the model `kind`, or what is wrong with them.
    pub fn fields(&self, kind: Option<ModelKind>) -> Result<ModelFields, String> {
        let disk = model_form::disk_from_name(&self.disk_expression)
            .ok_or_else(|| format!("unknown disk expression “{}”", self.disk_expression))?;
        Ok(ModelFields {
            kind,
            disk,
            irreversible: self.irreversible,
            kb_over_kf: self.kb_over_kf.clone(),
            dr_over_do: self.dr_over_do.clone(),
            thickness_um: self.thickness_um.clone(),
            step_mv: self.step_mv.clone(),
        })
    }
}

/// A saved session.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Session {
    /// Always [`SCHEMA`].
    pub schema: String,
    /// The Diffusor version that wrote it, as `0.1.0` (for the record).
    pub program_version: String,
    /// The cell and electrode as typed.
    pub cell: CellEntries,
    /// The fit choices that apply to every run.
    pub choices: ChoiceEntries,
    /// The runs, in the order of the list.
    pub runs: Vec<SessionRun>,
    /// The position in `runs` of the run in focus.
    pub focus: Option<usize>,
}

/// Where a saved run's bytes are.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum RunSource {
    /// A file on disk.
    File {
        /// Its path when the session was saved (absolute where it could be made so).
        path: String,
    },
    /// A bundled demo file, by name.
    Demo {
        /// Its name in the demo set.
        name: String,
    },
}

/// One bound of a saved window: `null` for automatic, else seconds after the step.
pub type SavedBound = Option<f64>;

/// One saved run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SessionRun {
    /// Where its bytes are.
    pub source: RunSource,
    /// SHA-256 of the bytes that were fitted, in hex.
    pub sha256: Option<String>,
    /// Whether it was ticked (overlays, replicate comparison).
    pub selected: bool,
    /// The window's lower bound, in s after the step (`null`: automatic).
    pub window_lo_s: SavedBound,
    /// The window's upper bound, in s after the step (`null`: automatic).
    pub window_hi_s: SavedBound,
    /// The model asked for: [`GEOMETRY_DEFAULT`] or the command line's name of a model.
    pub model: String,
    /// The entries some models need (absent in sessions saved before there were any).
    #[serde(default)]
    pub model_entries: ModelEntries,
    /// The time column named for the import (a position from 1 or header text; empty: the
    /// importer's choice).
    #[serde(default)]
    pub time_column: String,
    /// The current column named for the import, likewise.
    #[serde(default)]
    pub current_column: String,
}

/// A quantity as typed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct QuantityEntry {
    /// The value as typed.
    pub value: String,
    /// Its unit, as the form writes it (`cm²`).
    pub unit: String,
    /// The standard uncertainty as typed.
    pub uncertainty: String,
    /// `percent` or `absolute`.
    pub uncertainty_mode: String,
}

/// The cell form as typed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CellEntries {
    /// Electrons per molecule, as typed.
    pub n: String,
    /// `planar`, `microdisk`, `sphere` or `hemisphere`.
    pub geometry: String,
    /// `area`, `radius` or `diameter`.
    pub size_kind: String,
    /// The area.
    pub area: QuantityEntry,
    /// The radius or diameter.
    pub length: QuantityEntry,
    /// The bulk concentration.
    pub conc: QuantityEntry,
    /// Whether D is known and n·A·C is reported.
    pub inverse: bool,
    /// The known D.
    pub known_d: QuantityEntry,
    /// The temperature, as typed.
    pub temperature: String,
    /// Its unit, `°C` or `K`.
    pub temperature_unit: String,
}

/// The fit choices.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChoiceEntries {
    /// Fit a constant background current.
    pub intercept: bool,
    /// Refine the step onset.
    pub refine_onset: bool,
}

const GEOMETRIES: [Geometry; 4] = [
    Geometry::Planar,
    Geometry::Microdisk,
    Geometry::Sphere,
    Geometry::Hemisphere,
];

fn mode_name(m: UncertaintyMode) -> &'static str {
    match m {
        UncertaintyMode::Percent => "percent",
        UncertaintyMode::Absolute => "absolute",
    }
}

fn size_name(k: SizeKind) -> &'static str {
    match k {
        SizeKind::Area => "area",
        SizeKind::Radius => "radius",
        SizeKind::Diameter => "diameter",
    }
}

impl QuantityEntry {
    fn of<U: UnitChoice>(q: &QuantityField<U>) -> QuantityEntry {
        QuantityEntry {
            value: q.value.clone(),
            unit: q.unit.symbol().to_owned(),
            uncertainty: q.uncertainty.clone(),
            uncertainty_mode: mode_name(q.mode).to_owned(),
        }
    }

    fn field<U: UnitChoice>(&self, what: &str) -> Result<QuantityField<U>, String> {
        let unit = U::ALL
            .iter()
            .copied()
            .find(|u| u.symbol() == self.unit)
            .ok_or_else(|| format!("unknown {what} unit “{}”", self.unit))?;
        let mode = match self.uncertainty_mode.as_str() {
            "percent" => UncertaintyMode::Percent,
            "absolute" => UncertaintyMode::Absolute,
            other => return Err(format!("unknown uncertainty mode “{other}” of the {what}")),
        };
        Ok(QuantityField {
            value: self.value.clone(),
            unit,
            uncertainty: self.uncertainty.clone(),
            mode,
        })
    }
}

impl CellEntries {
    /// The form's entries.
    pub fn of(form: &CellForm) -> CellEntries {
        CellEntries {
            n: form.n.clone(),
            geometry: form.geometry.name().to_owned(),
            size_kind: size_name(form.size_kind).to_owned(),
            area: QuantityEntry::of(&form.area),
            length: QuantityEntry::of(&form.length),
            conc: QuantityEntry::of(&form.conc),
            inverse: form.inverse,
            known_d: QuantityEntry::of(&form.known_d),
            temperature: form.temperature.clone(),
            temperature_unit: form.temperature_unit.symbol().to_owned(),
        }
    }

    /// The form these entries describe, or what is wrong with them.
    pub fn form(&self) -> Result<CellForm, String> {
        let geometry = GEOMETRIES
            .into_iter()
            .find(|g| g.name() == self.geometry)
            .ok_or_else(|| format!("unknown geometry “{}”", self.geometry))?;
        let size_kind = [SizeKind::Area, SizeKind::Radius, SizeKind::Diameter]
            .into_iter()
            .find(|k| size_name(*k) == self.size_kind)
            .ok_or_else(|| format!("unknown electrode size kind “{}”", self.size_kind))?;
        let temperature_unit = [TemperatureUnit::Celsius, TemperatureUnit::Kelvin]
            .into_iter()
            .find(|u| u.symbol() == self.temperature_unit)
            .ok_or_else(|| format!("unknown temperature unit “{}”", self.temperature_unit))?;
        Ok(CellForm {
            n: self.n.clone(),
            geometry,
            size_kind,
            area: self.area.field("area")?,
            length: self.length.field("length")?,
            conc: self.conc.field("concentration")?,
            inverse: self.inverse,
            known_d: self.known_d.field("diffusion coefficient")?,
            temperature: self.temperature.clone(),
            temperature_unit,
        })
    }
}

impl From<FitChoices> for ChoiceEntries {
    fn from(c: FitChoices) -> Self {
        ChoiceEntries {
            intercept: c.intercept,
            refine_onset: c.refine_onset,
        }
    }
}

impl From<ChoiceEntries> for FitChoices {
    fn from(c: ChoiceEntries) -> Self {
        FitChoices {
            intercept: c.intercept,
            refine_onset: c.refine_onset,
        }
    }
}

impl Session {
    /// The file's text.
    pub fn to_json(&self) -> String {
        // Serialising plain strings, numbers and booleans cannot fail; the fallback keeps the
        // signature free of an error no caller could meet.
        serde_json::to_string_pretty(self).unwrap_or_default() + "\n"
    }
}

/// Reads a session file's text; `file` names it in the messages.
///
/// # Errors
///
/// Why the file is refused, as the user should read it: not JSON, not a session (another
/// schema), a newer session version, or a damaged session. The message ends with `file`.
pub fn parse(text: &str, file: &str) -> Result<Session, String> {
    let value: serde_json::Value = serde_json::from_str(text).map_err(|e| {
        format!(
            "not a session file: it is not valid JSON (line {}, column {}): {file}",
            e.line(),
            e.column()
        )
    })?;
    let schema = value.get("schema").and_then(serde_json::Value::as_str);
    let Some(schema) = schema else {
        return Err(format!(
            "not a Diffusor session file (it names no schema; a session starts with \"schema\": \"{SCHEMA}\"): {file}"
        ));
    };
    let Some(version) = schema.strip_prefix(FAMILY) else {
        return Err(format!(
            "not a Diffusor session file (its schema is “{schema}”, a session's is {SCHEMA}): {file}"
        ));
    };
    match version.parse::<u64>() {
        Ok(v) if v == VERSION => {}
        Ok(v) if v > VERSION => {
            return Err(format!(
                "this session was saved by a newer Diffusor ({schema}; this one reads {SCHEMA}): open it with that version, or update: {file}"
            ));
        }
        _ => {
            return Err(format!(
                "not a session this Diffusor can read (schema “{schema}”): {file}"
            ));
        }
    }
    let session: Session = serde_json::from_value(value)
        .map_err(|e| format!("the session file is damaged ({e}): {file}"))?;
    session
        .cell
        .form()
        .map_err(|e| format!("the session file is damaged ({e}): {file}"))?;
    if let Some(f) = session.focus
        && f >= session.runs.len()
    {
        return Err(format!(
            "the session file is damaged (the run in focus, {f}, is not among its {} runs): {file}",
            session.runs.len()
        ));
    }
    for run in &session.runs {
        run.model_entries
            .fields(None)
            .map_err(|e| format!("the session file is damaged ({e}): {file}"))?;
        for b in [run.window_lo_s, run.window_hi_s].into_iter().flatten() {
            if !(b.is_finite() && b >= 0.0) {
                return Err(format!(
                    "the session file is damaged (a window bound of {b} s): {file}"
                ));
            }
        }
    }
    Ok(session)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cell_form::CellPanel;

    fn sample() -> Session {
        let form = CellPanel::demo().form;
        Session {
            schema: SCHEMA.to_owned(),
            program_version: "0.1.0".to_owned(),
            cell: CellEntries::of(&form),
            choices: FitChoices::default().into(),
            runs: vec![SessionRun {
                source: RunSource::File {
                    path: "runs/a.csv".to_owned(),
                },
                sha256: Some("00".repeat(32)),
                selected: true,
                window_lo_s: Some(0.01),
                window_hi_s: None,
                model: "microdisk".to_owned(),
                model_entries: ModelEntries {
                    disk_expression: "shoup-szabo".to_owned(),
                    thickness_um: "2.5".to_owned(),
                    ..ModelEntries::default()
                },
                time_column: "1".to_owned(),
                current_column: String::new(),
            }],
            focus: Some(0),
        }
    }

    #[test]
    fn a_session_reads_back_as_written() {
        let s = sample();
        let back = parse(&s.to_json(), "s.json").expect("read back");
        assert_eq!(back, s);
        assert_eq!(back.cell.form().expect("a form"), CellPanel::demo().form);
    }

    #[test]
    fn foreign_newer_and_damaged_files_are_refused_with_their_reason() {
        assert_eq!(
            parse("{\"schema\": \"diffusor.fit/1\", \"runs\": []}", "r.json").expect_err("foreign"),
            "not a Diffusor session file (its schema is “diffusor.fit/1”, a session's is diffusor.session/1): r.json"
        );
        assert_eq!(
            parse("[1, 2]", "x.json").expect_err("no schema"),
            "not a Diffusor session file (it names no schema; a session starts with \"schema\": \"diffusor.session/1\"): x.json"
        );
        let newer = sample().to_json().replace(SCHEMA, "diffusor.session/2");
        assert_eq!(
            parse(&newer, "n.json").expect_err("newer"),
            "this session was saved by a newer Diffusor (diffusor.session/2; this one reads diffusor.session/1): open it with that version, or update: n.json"
        );
        let cut = &sample().to_json()[..40];
        assert!(
            parse(cut, "c.json")
                .expect_err("cut short")
                .starts_with("not a session file: it is not valid JSON (line ")
        );
        let bad_disk = sample().to_json().replace("shoup-szabo", "elliptic");
        assert_eq!(
            parse(&bad_disk, "d.json").expect_err("bad disk"),
            "the session file is damaged (unknown disk expression “elliptic”): d.json"
        );
        let bad_unit = sample().to_json().replace("\"cm²\"", "\"furlong²\"");
        assert_eq!(
            parse(&bad_unit, "u.json").expect_err("bad unit"),
            "the session file is damaged (unknown area unit “furlong²”): u.json"
        );
    }

    #[test]
    fn model_names_read_back_and_earlier_sessions_meant_planar() {
        for k in ModelKind::ALL {
            assert_eq!(model_kind(model_name(Some(k))), Ok(Some(k)));
        }
        assert_eq!(model_kind(model_name(None)), Ok(None));
        assert_eq!(model_kind("planar-cottrell"), Ok(Some(ModelKind::Cottrell)));
        assert!(model_kind("warped").is_err());
        // A run saved before model entries existed reads with the defaults.
        let old = sample()
            .to_json()
            .replace("\"model\": \"microdisk\"", "\"model\": \"planar-cottrell\"");
        let v: serde_json::Value = serde_json::from_str(&old).expect("json");
        let mut v = v;
        v["runs"][0]
            .as_object_mut()
            .expect("run")
            .remove("model_entries");
        let back = parse(&v.to_string(), "old.json").expect("an earlier session");
        assert_eq!(back.runs[0].model_entries, ModelEntries::default());
        assert_eq!(
            back.runs[0].model_entries.fields(None).expect("fields"),
            ModelFields::default()
        );
    }
}
