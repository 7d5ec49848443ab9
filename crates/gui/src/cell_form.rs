//! The cell and electrode as typed: raw text in the user's units, turned into a validated
//! [`Cell`] (SI) the fit can use. Impossible entries are refused where they are typed, with the
//! message [`Cell::validate`] gives.

use crate::units::{
    AreaUnit, ConcUnit, DiffusionUnit, LengthUnit, TemperatureUnit, UncertaintyMode, UnitChoice,
};
use diffusor_fit::cell::{Cell, Geometry, Measured};
use diffusor_fit::planar::PlanarOptions;
use diffusor_fit::window::BoundChoice;
use eframe::egui;

/// A number typed with its unit and standard uncertainty.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct QuantityField<U> {
    /// The value as typed.
    pub value: String,
    /// Its unit.
    pub unit: U,
    /// The standard uncertainty as typed (empty for none).
    pub uncertainty: String,
    /// Whether the uncertainty is a percentage or in the value's unit.
    pub mode: UncertaintyMode,
}

impl<U: UnitChoice> QuantityField<U> {
    /// A field preset to `value` in `unit` with a relative uncertainty in percent.
    pub fn percent(value: &str, unit: U, percent: &str) -> Self {
        QuantityField {
            value: value.to_owned(),
            unit,
            uncertainty: percent.to_owned(),
            mode: UncertaintyMode::Percent,
        }
    }

    /// The typed value and uncertainty in the typed unit (the uncertainty made absolute), or
    /// `None` when the value is empty.
    fn typed(&self) -> Result<Option<Measured>, String> {
        let Some(value) = parse_number(&self.value)? else {
            return Ok(None);
        };
        let u = parse_number(&self.uncertainty)?.unwrap_or(0.0);
        let u = match self.mode {
            UncertaintyMode::Percent => value.abs() * u / 100.0,
            UncertaintyMode::Absolute => u,
        };
        Ok(Some(Measured::new(value, u)))
    }
}

/// How the electrode's size is given.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum SizeKind {
    /// Its area.
    #[default]
    Area,
    /// Its radius.
    Radius,
    /// Its diameter.
    Diameter,
}

/// Reads a number typed by a person: surrounding spaces ignored, a decimal comma accepted when
/// there is no point, an exponent with `e`. `Ok(None)` for an empty field.
pub fn parse_number(text: &str) -> Result<Option<f64>, String> {
    let t = text.trim();
    if t.is_empty() {
        return Ok(None);
    }
    let normal = if t.contains('.') {
        t.to_owned()
    } else {
        t.replacen(',', ".", 1)
    };
    match normal.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(Some(v)),
        _ => Err(format!("“{t}” is not a number")),
    }
}

/// What the user typed about the cell and electrode.
#[derive(Debug, Clone, PartialEq)]
pub struct CellForm {
    /// Electrons per molecule.
    pub n: String,
    /// Electrode geometry.
    pub geometry: Geometry,
    /// Which of area, radius or diameter is typed.
    pub size_kind: SizeKind,
    /// Area.
    pub area: QuantityField<AreaUnit>,
    /// Radius or diameter, as `size_kind` says.
    pub length: QuantityField<LengthUnit>,
    /// Bulk concentration.
    pub conc: QuantityField<ConcUnit>,
    /// Use a known D and report n·A·C (and the area) instead.
    pub inverse: bool,
    /// The known D.
    pub known_d: QuantityField<DiffusionUnit>,
    /// Temperature, for the record.
    pub temperature: String,
    /// Its unit.
    pub temperature_unit: TemperatureUnit,
}

impl Default for CellForm {
    fn default() -> Self {
        CellForm {
            n: "1".to_owned(),
            geometry: Geometry::Planar,
            size_kind: SizeKind::Area,
            area: QuantityField::default(),
            length: QuantityField::default(),
            conc: QuantityField::default(),
            inverse: false,
            known_d: QuantityField::default(),
            temperature: String::new(),
            temperature_unit: TemperatureUnit::Celsius,
        }
    }
}

/// Messages for the fields that cannot be used, each shown under its field.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FieldErrors {
    /// About n.
    pub n: Option<String>,
    /// About the area, radius or diameter.
    pub size: Option<String>,
    /// About the concentration.
    pub conc: Option<String>,
    /// About the known D.
    pub known_d: Option<String>,
    /// About the temperature.
    pub temperature: Option<String>,
}

impl FieldErrors {
    /// Whether every field can be used.
    pub fn is_empty(&self) -> bool {
        self.n.is_none()
            && self.size.is_none()
            && self.conc.is_none()
            && self.known_d.is_none()
            && self.temperature.is_none()
    }
}

/// Runs the engine's own check on a cell holding only one entry, so the message names that
/// entry. The values passed are in the typed unit: positivity and finiteness do not depend on
/// the (positive) unit factor, and the message then quotes the number the user typed.
fn check(one: &Cell) -> Option<String> {
    one.validate().err()
}

impl CellForm {
    /// The cell of the bundled demo: a 3.00 mm disk (A = 0.0707 cm² ± 1 %), 1.00 mM ± 1 %,
    /// n = 1, 25.0 °C, as in `sample-data/README.md`.
    pub fn demo() -> Self {
        CellForm {
            n: "1".to_owned(),
            geometry: Geometry::Planar,
            size_kind: SizeKind::Area,
            area: QuantityField::percent("0.0707", AreaUnit::Cm2, "1"),
            length: QuantityField::default(),
            conc: QuantityField::percent("1.00", ConcUnit::MilliMolar, "1"),
            inverse: false,
            known_d: QuantityField::percent("", DiffusionUnit::Cm2PerS, ""),
            temperature: "25.0".to_owned(),
            temperature_unit: TemperatureUnit::Celsius,
        }
    }

    /// The validated cell in SI, or the message for each field that cannot be used.
    pub fn cell(&self) -> Result<Cell, FieldErrors> {
        let mut errors = FieldErrors::default();
        let mut cell = Cell::default();

        match parse_number(&self.n) {
            Ok(Some(n)) => {
                errors.n = check(&Cell {
                    n,
                    ..Cell::default()
                });
                cell.n = n;
            }
            Ok(None) => errors.n = Some("enter the number of electrons n".to_owned()),
            Err(e) => errors.n = Some(e),
        }
        cell.geometry = self.geometry;

        match self.size_kind {
            SizeKind::Area => match self.area.typed() {
                Ok(Some(m)) => {
                    errors.size = check(&Cell {
                        area_m2: Some(m),
                        ..Cell::default()
                    });
                    let f = self.area.unit.to_si();
                    cell.area_m2 = Some(Measured::new(m.value * f, m.u * f));
                }
                Ok(None) => {}
                Err(e) => errors.size = Some(e),
            },
            SizeKind::Radius | SizeKind::Diameter => match self.length.typed() {
                Ok(Some(m)) => {
                    errors.size = check(&Cell {
                        radius_m: Some(m),
                        ..Cell::default()
                    });
                    let half = if self.size_kind == SizeKind::Diameter {
                        0.5
                    } else {
                        1.0
                    };
                    let f = self.length.unit.to_si() * half;
                    cell.radius_m = Some(Measured::new(m.value * f, m.u * f));
                }
                Ok(None) => {}
                Err(e) => errors.size = Some(e),
            },
        }

        match self.conc.typed() {
            Ok(Some(m)) => {
                errors.conc = check(&Cell {
                    conc_mol_m3: Some(m),
                    ..Cell::default()
                });
                let f = self.conc.unit.to_si();
                cell.conc_mol_m3 = Some(Measured::new(m.value * f, m.u * f));
            }
            Ok(None) => {}
            Err(e) => errors.conc = Some(e),
        }

        if self.inverse {
            match self.known_d.typed() {
                Ok(Some(m)) => {
                    errors.known_d = check(&Cell {
                        known_d_m2_s: Some(m),
                        ..Cell::default()
                    });
                    let f = self.known_d.unit.to_si();
                    cell.known_d_m2_s = Some(Measured::new(m.value * f, m.u * f));
                }
                Ok(None) => {
                    errors.known_d =
                        Some("enter the known D, or untick the inverse mode".to_owned());
                }
                Err(e) => errors.known_d = Some(e),
            }
        }

        match parse_number(&self.temperature) {
            Ok(Some(t)) => {
                let k = self.temperature_unit.to_kelvin(t);
                errors.temperature = check(&Cell {
                    temperature_k: Some(k),
                    ..Cell::default()
                });
                cell.temperature_k = Some(k);
            }
            Ok(None) => {}
            Err(e) => errors.temperature = Some(e),
        }

        if !errors.is_empty() {
            return Err(errors);
        }
        // Every entry passed on its own; the whole cell must too.
        cell.validate().map_err(|e| FieldErrors {
            n: Some(e),
            ..FieldErrors::default()
        })?;
        Ok(cell)
    }
}

/// Fit choices that apply to every run.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct FitChoices {
    /// Fit a constant background current (intercept).
    pub intercept: bool,
    /// Refine the step onset t0.
    pub refine_onset: bool,
}

impl Default for FitChoices {
    fn default() -> Self {
        let o = PlanarOptions::default();
        FitChoices {
            intercept: o.intercept,
            refine_onset: o.refine_t0,
        }
    }
}

impl FitChoices {
    /// The engine's options for a run with the window `lo`..`hi`.
    pub fn options(self, lo: BoundChoice, hi: BoundChoice) -> PlanarOptions {
        let mut o = PlanarOptions {
            intercept: self.intercept,
            refine_t0: self.refine_onset,
            ..PlanarOptions::default()
        };
        o.window.lo = lo;
        o.window.hi = hi;
        o
    }
}

/// The "Cell & electrode" panel: the form, the fit choices and where each bad entry is flagged.
#[derive(Debug, Clone, Default)]
pub struct CellPanel {
    /// What is typed.
    pub form: CellForm,
    /// Fit choices.
    pub choices: FitChoices,
}

/// A grid row under a field with the reason it cannot be used, when there is one.
fn error_row_ui(ui: &mut egui::Ui, message: Option<&String>) {
    if let Some(m) = message {
        ui.label("");
        ui.add(
            egui::Label::new(
                egui::RichText::new(m)
                    .color(ui.visuals().error_fg_color)
                    .small(),
            )
            .wrap(),
        );
        ui.end_row();
    }
}

fn unit_combo_ui<U: UnitChoice>(ui: &mut egui::Ui, id: &str, unit: &mut U, name: &str) {
    egui::ComboBox::from_id_salt(id)
        .selected_text(unit.symbol())
        .width(56.0)
        .show_ui(ui, |ui| {
            for &u in U::ALL {
                ui.selectable_value(unit, u, u.symbol());
            }
        })
        .response
        .accessible_name(name);
}

/// The value, unit and uncertainty of one quantity on one line.
fn quantity_ui<U: UnitChoice>(
    ui: &mut egui::Ui,
    label: egui::Id,
    id: &str,
    what: &str,
    field: &mut QuantityField<U>,
) {
    ui.horizontal(|ui| {
        ui.add(
            egui::TextEdit::singleline(&mut field.value)
                .desired_width(58.0)
                .hint_text("value"),
        )
        .labelled_by(label);
        unit_combo_ui(
            ui,
            &format!("{id}-unit"),
            &mut field.unit,
            &format!("unit of the {what}"),
        );
        ui.label("±");
        ui.add(
            egui::TextEdit::singleline(&mut field.uncertainty)
                .desired_width(34.0)
                .hint_text("u"),
        )
        .accessible_name(format!("standard uncertainty of the {what}"));
        let unit_text = match field.mode {
            UncertaintyMode::Percent => "%",
            UncertaintyMode::Absolute => field.unit.symbol(),
        };
        egui::ComboBox::from_id_salt(format!("{id}-u-mode"))
            .selected_text(unit_text)
            .width(44.0)
            .show_ui(ui, |ui| {
                ui.selectable_value(&mut field.mode, UncertaintyMode::Percent, "%");
                ui.selectable_value(
                    &mut field.mode,
                    UncertaintyMode::Absolute,
                    field.unit.symbol(),
                );
            })
            .response
            .accessible_name(format!("how the uncertainty of the {what} is given"));
    });
}

impl CellPanel {
    /// The panel preset to the demo's electrode and solution.
    pub fn demo() -> Self {
        CellPanel {
            form: CellForm::demo(),
            choices: FitChoices::default(),
        }
    }

    /// Draws the form. Whether anything was edited is read by comparing the cell afterwards.
    pub fn ui(&mut self, ui: &mut egui::Ui) {
        let errors = self.form.cell().err().unwrap_or_default();
        let f = &mut self.form;
        egui::Grid::new("cell-grid")
            .num_columns(2)
            .spacing([8.0, 4.0])
            .show(ui, |ui| {
                let l = ui.label("n (electrons)");
                ui.add(egui::TextEdit::singleline(&mut f.n).desired_width(64.0))
                    .labelled_by(l.id);
                ui.end_row();
                error_row_ui(ui, errors.n.as_ref());

                let l = ui.label("Geometry");
                egui::ComboBox::from_id_salt("geometry")
                    .selected_text(geometry_name(f.geometry))
                    .show_ui(ui, |ui| {
                        for g in [
                            Geometry::Planar,
                            Geometry::Microdisk,
                            Geometry::Sphere,
                            Geometry::Hemisphere,
                        ] {
                            ui.selectable_value(&mut f.geometry, g, geometry_name(g));
                        }
                    })
                    .response
                    .labelled_by(l.id);
                ui.end_row();

                ui.label("Size from");
                ui.horizontal(|ui| {
                    ui.selectable_value(&mut f.size_kind, SizeKind::Area, "area");
                    ui.selectable_value(&mut f.size_kind, SizeKind::Radius, "radius");
                    ui.selectable_value(&mut f.size_kind, SizeKind::Diameter, "diameter");
                });
                ui.end_row();

                match f.size_kind {
                    SizeKind::Area => {
                        let l = ui.label("Area A");
                        quantity_ui(ui, l.id, "area", "area", &mut f.area);
                    }
                    SizeKind::Radius => {
                        let l = ui.label("Radius r");
                        quantity_ui(ui, l.id, "length", "radius", &mut f.length);
                    }
                    SizeKind::Diameter => {
                        let l = ui.label("Diameter");
                        quantity_ui(ui, l.id, "length", "diameter", &mut f.length);
                    }
                }
                ui.end_row();
                error_row_ui(ui, errors.size.as_ref());

                let l = ui.label("Concentration C");
                quantity_ui(ui, l.id, "conc", "concentration", &mut f.conc);
                ui.end_row();
                error_row_ui(ui, errors.conc.as_ref());

                ui.label("Known D");
                ui.checkbox(&mut f.inverse, "use it (inverse mode: find n·A·C)");
                ui.end_row();
                if f.inverse {
                    let l = ui.label("D");
                    quantity_ui(ui, l.id, "known-d", "known D", &mut f.known_d);
                    ui.end_row();
                    error_row_ui(ui, errors.known_d.as_ref());
                }

                let l = ui.label("Temperature");
                ui.horizontal(|ui| {
                    ui.add(
                        egui::TextEdit::singleline(&mut f.temperature)
                            .desired_width(64.0)
                            .hint_text("optional"),
                    )
                    .labelled_by(l.id);
                    egui::ComboBox::from_id_salt("temperature-unit")
                        .selected_text(f.temperature_unit.symbol())
                        .width(48.0)
                        .show_ui(ui, |ui| {
                            for u in [TemperatureUnit::Celsius, TemperatureUnit::Kelvin] {
                                ui.selectable_value(&mut f.temperature_unit, u, u.symbol());
                            }
                        })
                        .response
                        .accessible_name("unit of the temperature");
                    ui.weak("record only");
                });
                ui.end_row();
                error_row_ui(ui, errors.temperature.as_ref());
            });
        ui.add_space(4.0);
        ui.horizontal_wrapped(|ui| {
            ui.checkbox(&mut self.choices.intercept, "fit a background current b")
                .on_hover_text("I = S·(t − t0)^-½ + b: a constant background is fitted with the slope");
            ui.checkbox(&mut self.choices.refine_onset, "refine the step onset t0")
                .on_hover_text("The step onset is fitted, because a fraction of a sample off bends the Cottrell plot at short times");
        });
        if self.form.inverse {
            ui.weak("In inverse mode the area is used only for the edge-diffusion check; with C entered, the electroactive area is reported.");
        }
    }
}

/// The geometry as the form lists it.
pub fn geometry_name(g: Geometry) -> &'static str {
    match g {
        Geometry::Planar => "planar (macro disk)",
        Geometry::Microdisk => "microdisk",
        Geometry::Sphere => "sphere",
        Geometry::Hemisphere => "hemisphere",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_accept_a_decimal_comma_and_refuse_words() {
        assert_eq!(parse_number(" 0,0707 "), Ok(Some(0.0707)));
        assert_eq!(parse_number("1.5e-3"), Ok(Some(1.5e-3)));
        assert_eq!(parse_number(""), Ok(None));
        assert_eq!(parse_number("abc"), Err("“abc” is not a number".to_owned()));
        // A thousands separator is not guessed at: "1,000.5" is refused, not read as 1.0005.
        assert!(parse_number("1,000.5").is_err());
    }

    #[test]
    fn the_demo_form_gives_the_demo_cell_in_si() {
        let cell = CellForm::demo().cell().expect("demo cell is valid");
        // sample-data/README.md: A = 0.0707 cm² = 7.07e-6 m², C = 1.00 mM = 1.00 mol/m³, ±1 %.
        let a = cell.area_m2.expect("area");
        assert!((a.value - 7.07e-6).abs() < 1e-18);
        assert!((a.u - 7.07e-8).abs() < 1e-20);
        let c = cell.conc_mol_m3.expect("concentration");
        assert!((c.value - 1.0).abs() < 1e-15 && (c.u - 0.01).abs() < 1e-15);
        assert_eq!(cell.temperature_k, Some(298.15));
        assert_eq!(cell.known_d_m2_s, None);
    }

    #[test]
    fn a_diameter_becomes_a_radius() {
        let mut form = CellForm::demo();
        form.size_kind = SizeKind::Diameter;
        form.length = QuantityField {
            value: "3.00".to_owned(),
            unit: LengthUnit::Mm,
            uncertainty: "0.02".to_owned(),
            mode: UncertaintyMode::Absolute,
        };
        let r = form.cell().expect("valid").radius_m.expect("radius");
        assert!((r.value - 1.5e-3).abs() < 1e-15 && (r.u - 1e-5).abs() < 1e-18);
    }

    #[test]
    fn impossible_entries_are_flagged_on_their_own_field_with_the_engines_message() {
        let mut form = CellForm::demo();
        form.n = "0".to_owned();
        form.area.value = "-1".to_owned();
        form.conc.value = "x".to_owned();
        form.temperature = "-300".to_owned();
        let errors = form.cell().expect_err("invalid");
        // The messages of Cell::validate, quoting the numbers as typed.
        assert_eq!(
            errors.n.as_deref(),
            Some("n must be a positive number of electrons, not 0")
        );
        assert_eq!(
            errors.size.as_deref(),
            Some("the area must be positive, not -1")
        );
        assert_eq!(errors.conc.as_deref(), Some("“x” is not a number"));
        // -300 °C is -26.85 K.
        assert!(errors.temperature.as_deref().is_some_and(|m| {
            m.starts_with("the temperature must be positive in kelvin, not -26.8")
        }));
        assert_eq!(errors.known_d, None);
    }

    #[test]
    fn the_inverse_mode_needs_a_known_d() {
        let mut form = CellForm::demo();
        form.inverse = true;
        let errors = form.cell().expect_err("no D typed");
        assert_eq!(
            errors.known_d.as_deref(),
            Some("enter the known D, or untick the inverse mode")
        );
        form.known_d.value = "7.0e-6".to_owned();
        let d = form.cell().expect("valid").known_d_m2_s.expect("D");
        assert!((d.value - 7.0e-10).abs() < 1e-22);
    }
}
