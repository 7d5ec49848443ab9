//! Import options shared by every verb that reads files.

use clap::Args;
use diffusor_trace::{ColumnChoice, ImportOptions, OnsetChoice, Quantity, Unit};

/// How to read the files, when the importer's guesses need correcting.
#[derive(Debug, Clone, Args)]
pub struct ImportArgs {
    /// Column holding time: its position (from 1) or header name.
    #[arg(long, value_name = "COL")]
    pub time_col: Option<String>,
    /// Column holding current: its position (from 1) or header name.
    #[arg(long, value_name = "COL")]
    pub current_col: Option<String>,
    /// Column holding potential: its position (from 1) or header name.
    #[arg(long, value_name = "COL")]
    pub potential_col: Option<String>,
    /// Column holding charge: its position (from 1) or header name.
    #[arg(long, value_name = "COL")]
    pub charge_col: Option<String>,
    /// Unit of the time column (s, ms, µs/us, min).
    #[arg(long, value_name = "UNIT", value_parser = time_unit)]
    pub time_unit: Option<Unit>,
    /// Unit of the current column (A, mA, µA/uA, nA, pA).
    #[arg(long, value_name = "UNIT", value_parser = current_unit)]
    pub current_unit: Option<Unit>,
    /// Unit of the potential column (V, mV).
    #[arg(long, value_name = "UNIT", value_parser = potential_unit)]
    pub potential_unit: Option<Unit>,
    /// Where the step is: `auto` (from the potential, else the current), `file` (keep the
    /// file's clock), or the step time in seconds on the file's clock.
    #[arg(long, value_name = "WHEN", default_value = "auto", value_parser = onset)]
    pub step_at: OnsetChoice,
}

fn unit_of(text: &str, quantity: Quantity) -> Result<Unit, String> {
    match Unit::parse(text) {
        Some(u) if u.quantity == quantity => Ok(u),
        Some(u) => Err(format!(
            "{} measures {}, not {}",
            u.symbol,
            u.quantity.name(),
            quantity.name()
        )),
        None => Err(format!("unknown unit {text:?}")),
    }
}

fn time_unit(text: &str) -> Result<Unit, String> {
    unit_of(text, Quantity::Time)
}

fn current_unit(text: &str) -> Result<Unit, String> {
    unit_of(text, Quantity::Current)
}

fn potential_unit(text: &str) -> Result<Unit, String> {
    unit_of(text, Quantity::Potential)
}

fn onset(text: &str) -> Result<OnsetChoice, String> {
    match text {
        "auto" => Ok(OnsetChoice::Detect),
        "file" => Ok(OnsetChoice::FileClock),
        _ => text
            .parse::<f64>()
            .ok()
            .filter(|t| t.is_finite())
            .map(OnsetChoice::At)
            .ok_or_else(|| format!("expected auto, file or a time in seconds, found {text:?}")),
    }
}

impl ImportArgs {
    /// The validated import options.
    pub fn options(&self) -> ImportOptions {
        let col = |c: &Option<String>| c.as_deref().map(ColumnChoice::parse);
        ImportOptions {
            time_column: col(&self.time_col),
            current_column: col(&self.current_col),
            potential_column: col(&self.potential_col),
            charge_column: col(&self.charge_col),
            time_unit: self.time_unit.clone(),
            current_unit: self.current_unit.clone(),
            potential_unit: self.potential_unit.clone(),
            onset: self.step_at,
            ..ImportOptions::default()
        }
    }
}
