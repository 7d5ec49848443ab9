//! The model of one run as the user chose it: which model (or the engine's default for the
//! geometry), and the few inputs some models need besides the cell — the disk expression, the
//! back reaction of the kinetic model, the film thickness of the slab, the step height of the
//! charging model. The words are this program's; the models and their inputs are
//! [`diffusor_fit::analysis`]'s.

use diffusor_fit::analysis::{ModelInputs, ModelKind};
use diffusor_fit::models::kinetics::BackReaction;
use diffusor_fit::models::microdisk::DiskExpression;

use crate::cell_form::parse_number;

/// The name a model has in the window (the command line's name is [`ModelKind::name`]).
pub fn label(kind: ModelKind) -> &'static str {
    match kind {
        ModelKind::Cottrell => "Planar diffusion (Cottrell)",
        ModelKind::CottrellCharging => "Planar + charging decay, every point",
        ModelKind::Microdisk => "Inlaid disk",
        ModelKind::Sphere => "Sphere or hemisphere",
        ModelKind::Kinetic => "Planar, finite electron transfer",
        ModelKind::Anson => "Charge against √t (Anson)",
        ModelKind::DoubleStep => "Double step (forward and back)",
        ModelKind::Slab => "Film with a blocked back face",
    }
}

/// What a model needs that the cell form does not hold, in a few words for the tooltip.
pub fn needs(kind: ModelKind) -> &'static str {
    match kind {
        ModelKind::Cottrell => "area and concentration for D (or a known D for n·A·C)",
        ModelKind::CottrellCharging => {
            "area and concentration for D; the step height for Ru and Cdl (from the potential column when there is one)"
        }
        ModelKind::Microdisk => "the disk radius; fits D and C together",
        ModelKind::Sphere => "the radius; D follows from slope and intercept without C",
        ModelKind::Kinetic => "area, concentration and the back reaction; fits kf and D",
        ModelKind::Anson => "area and concentration; the current is integrated to charge",
        ModelKind::DoubleStep => "a file with a step forward and a step back",
        ModelKind::Slab => "area and the film thickness L",
    }
}

/// The model entries of one run, as typed.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelFields {
    /// The model asked for; `None` lets the engine take the geometry's default.
    pub kind: Option<ModelKind>,
    /// The disk expression.
    pub disk: DiskExpression,
    /// Whether the kinetic model's back reaction is negligible.
    pub irreversible: bool,
    /// kb/kf at the stepped potential, as typed.
    pub kb_over_kf: String,
    /// D_R/D_O, as typed (empty: 1).
    pub dr_over_do: String,
    /// Film thickness in µm, as typed.
    pub thickness_um: String,
    /// Step height in mV, as typed (empty: from the potential column).
    pub step_mv: String,
}

impl Default for ModelFields {
    fn default() -> Self {
        ModelFields {
            kind: None,
            disk: DiskExpression::default(),
            irreversible: true,
            kb_over_kf: String::new(),
            dr_over_do: String::new(),
            thickness_um: String::new(),
            step_mv: String::new(),
        }
    }
}

/// Problems with the typed model entries, by field.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ModelProblems {
    /// kb/kf.
    pub kb_over_kf: Option<String>,
    /// D_R/D_O.
    pub dr_over_do: Option<String>,
    /// The thickness.
    pub thickness: Option<String>,
    /// The step height.
    pub step: Option<String>,
}

impl ModelProblems {
    /// Whether any entry has a problem.
    pub fn any(&self) -> bool {
        self.kb_over_kf.is_some()
            || self.dr_over_do.is_some()
            || self.thickness.is_some()
            || self.step.is_some()
    }
}

fn positive(text: &str, what: &str) -> Result<Option<f64>, String> {
    match parse_number(text)? {
        Some(v) if v > 0.0 => Ok(Some(v)),
        Some(_) => Err(format!("{what} must be more than 0")),
        None => Ok(None),
    }
}

impl ModelFields {
    /// The engine's inputs, or what is wrong with the entries. Only the entries the chosen
    /// model reads are checked, so a stray entry for another model does not block a fit.
    pub fn inputs(&self) -> Result<ModelInputs, ModelProblems> {
        let mut p = ModelProblems::default();
        let kind = self.kind;
        let mut inputs = ModelInputs {
            disk_expression: self.disk,
            ..ModelInputs::default()
        };
        if kind == Some(ModelKind::Kinetic) {
            inputs.back_reaction = if self.irreversible {
                Some(BackReaction::Irreversible)
            } else {
                let ratio = match parse_number(&self.kb_over_kf) {
                    Ok(Some(v)) if v >= 0.0 => Some(v),
                    Ok(Some(_)) => {
                        p.kb_over_kf = Some("kb/kf cannot be negative".to_owned());
                        None
                    }
                    Ok(None) => {
                        p.kb_over_kf =
                            Some("enter kb/kf, or tick “negligible back reaction”".to_owned());
                        None
                    }
                    Err(e) => {
                        p.kb_over_kf = Some(e);
                        None
                    }
                };
                let dr = match positive(&self.dr_over_do, "D_R/D_O") {
                    Ok(v) => v.unwrap_or(1.0),
                    Err(e) => {
                        p.dr_over_do = Some(e);
                        1.0
                    }
                };
                ratio.map(|kb_over_kf| BackReaction::QuasiReversible {
                    kb_over_kf,
                    dr_over_do: dr,
                })
            };
        }
        // The thickness also tells the geometry check about a film, so it is read whatever the
        // model.
        match positive(&self.thickness_um, "the thickness") {
            Ok(v) => inputs.thickness_m = v.map(|um| um * 1e-6),
            Err(e) => p.thickness = Some(e),
        }
        if kind == Some(ModelKind::Slab) && inputs.thickness_m.is_none() && p.thickness.is_none() {
            p.thickness = Some("the film model needs the thickness".to_owned());
        }
        if kind == Some(ModelKind::CottrellCharging) {
            match parse_number(&self.step_mv) {
                Ok(Some(v)) if v != 0.0 => inputs.step_v = Some(v * 1e-3),
                Ok(Some(_)) => p.step = Some("the step height cannot be 0".to_owned()),
                Ok(None) => {}
                Err(e) => p.step = Some(e),
            }
        }
        if p.any() { Err(p) } else { Ok(inputs) }
    }
}

/// The names a session file gives the disk expressions.
pub fn disk_name(d: DiskExpression) -> &'static str {
    match d {
        DiskExpression::MahonOldham => "mahon-oldham",
        DiskExpression::ShoupSzabo => "shoup-szabo",
    }
}

/// The disk expression a session file names.
pub fn disk_from_name(name: &str) -> Option<DiskExpression> {
    [DiskExpression::MahonOldham, DiskExpression::ShoupSzabo]
        .into_iter()
        .find(|d| disk_name(*d) == name)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_the_chosen_model_entries_are_required() {
        let mut f = ModelFields::default();
        assert!(f.inputs().is_ok());
        f.kind = Some(ModelKind::Slab);
        let p = f.inputs().unwrap_err();
        assert!(p.thickness.is_some());
        f.thickness_um = "2,5".to_owned();
        let i = f.inputs().unwrap();
        assert!((i.thickness_m.unwrap() - 2.5e-6).abs() < 1e-18);
        f.kind = Some(ModelKind::Kinetic);
        assert_eq!(
            f.inputs().unwrap().back_reaction,
            Some(BackReaction::Irreversible)
        );
        f.irreversible = false;
        assert!(f.inputs().unwrap_err().kb_over_kf.is_some());
        f.kb_over_kf = "0.1".to_owned();
        assert_eq!(
            f.inputs().unwrap().back_reaction,
            Some(BackReaction::QuasiReversible {
                kb_over_kf: 0.1,
                dr_over_do: 1.0
            })
        );
        f.dr_over_do = "-2".to_owned();
        assert!(f.inputs().unwrap_err().dr_over_do.is_some());
    }

    #[test]
    fn a_step_height_in_millivolts_reaches_the_charging_model_in_volts() {
        let f = ModelFields {
            kind: Some(ModelKind::CottrellCharging),
            step_mv: "-250".to_owned(),
            ..ModelFields::default()
        };
        assert_eq!(f.inputs().unwrap().step_v, Some(-0.25));
    }

    #[test]
    fn disk_names_round_trip() {
        for d in [DiskExpression::MahonOldham, DiskExpression::ShoupSzabo] {
            assert_eq!(disk_from_name(disk_name(d)), Some(d));
        }
        assert_eq!(disk_from_name("other"), None);
    }
}
