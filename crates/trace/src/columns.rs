//! Column names, roles and units read from header cells.

use serde::Serialize;

use crate::units::{Quantity, Unit};

/// Where a column's role or unit came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Provenance {
    /// Read from the file's header.
    Header,
    /// Guessed from the data or assumed by default; a warning says so.
    Assumed,
    /// Given explicitly by the user.
    Override,
}

/// One column of the table as the importer understood it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ColumnInfo {
    /// Position in the row, counting from 1 as people do.
    pub number: usize,
    /// Header text as written (empty when the file has no header).
    pub header: String,
    /// Name part of the header, without the unit.
    pub name: String,
    /// Unit as written in the header, if any.
    pub unit_text: Option<String>,
    /// The role the column plays in the trace, if it was used.
    pub role: Option<Quantity>,
    /// How the role was decided.
    pub role_provenance: Provenance,
    /// The unit used to convert the column to SI, if it was used.
    pub unit: Option<Unit>,
    /// How the unit was decided.
    pub unit_provenance: Provenance,
}

/// Splits a header cell into a name and a unit text.
///
/// Accepts `t (ms)`, `current [mA]`, `Time/s`, `I / µA`, `time_s`, `Zeit in s`, `current mA` and a
/// bare unit such as `s` (the unit row of a two-line header).
pub(crate) fn split_header(cell: &str) -> (String, Option<String>) {
    let cell = cell.trim().trim_matches('"').trim();
    // Brackets at the end: name (unit) or name [unit] or name {unit}.
    for (open, close) in [('(', ')'), ('[', ']'), ('{', '}')] {
        if let Some(stripped) = cell.strip_suffix(close)
            && let Some(pos) = stripped.rfind(open)
        {
            let name = stripped[..pos].trim().trim_end_matches(['/', ',']).trim();
            let unit = stripped[pos + open.len_utf8()..].trim();
            return (name.to_owned(), Some(unit.to_owned()));
        }
    }
    // Separators whose right-hand side is a unit we know.
    for sep in ["/", " in ", "_", " ", ","] {
        if let Some(pos) = cell.rfind(sep) {
            let unit = cell[pos + sep.len()..].trim();
            if Unit::parse(unit).is_some() {
                return (cell[..pos].trim().to_owned(), Some(unit.to_owned()));
            }
        }
    }
    if Unit::parse(cell).is_some() && cell.chars().count() > 1 {
        return (String::new(), Some(cell.to_owned()));
    }
    (cell.to_owned(), None)
}

/// Guesses a role from a column name in several languages.
pub(crate) fn role_from_name(name: &str) -> Option<Quantity> {
    let lower: String = name
        .to_lowercase()
        .chars()
        .filter(|c| c.is_alphanumeric())
        .collect();
    if lower.is_empty() {
        return None;
    }
    const EXACT: &[(&str, Quantity)] = &[
        ("t", Quantity::Time),
        ("i", Quantity::Current),
        ("e", Quantity::Potential),
        ("u", Quantity::Potential),
        ("q", Quantity::Charge),
        // Too short to search for inside other words.
        ("tid", Quantity::Time),
    ];
    for (word, q) in EXACT {
        if lower == *word {
            return Some(*q);
        }
    }
    // Word stems, English first, then German, French, Spanish, Italian, Portuguese, Dutch,
    // Polish, Swedish, Russian, Chinese and Japanese where they are used for these columns.
    const STEMS: &[(&str, Quantity)] = &[
        ("time", Quantity::Time),
        ("elapsed", Quantity::Time),
        ("zeit", Quantity::Time),
        ("temps", Quantity::Time),
        ("tiempo", Quantity::Time),
        ("tempo", Quantity::Time),
        ("tijd", Quantity::Time),
        ("czas", Quantity::Time),
        ("время", Quantity::Time),
        ("时间", Quantity::Time),
        ("時間", Quantity::Time),
        ("current", Quantity::Current),
        ("strom", Quantity::Current),
        ("courant", Quantity::Current),
        ("corriente", Quantity::Current),
        ("corrente", Quantity::Current),
        ("stroom", Quantity::Current),
        ("prąd", Quantity::Current),
        ("ström", Quantity::Current),
        ("ток", Quantity::Current),
        ("电流", Quantity::Current),
        ("電流", Quantity::Current),
        ("potential", Quantity::Potential),
        ("voltage", Quantity::Potential),
        ("spannung", Quantity::Potential),
        ("potentiel", Quantity::Potential),
        ("potencial", Quantity::Potential),
        ("potenziale", Quantity::Potential),
        ("potentiaal", Quantity::Potential),
        ("napięcie", Quantity::Potential),
        ("потенциал", Quantity::Potential),
        ("电位", Quantity::Potential),
        ("電位", Quantity::Potential),
        ("电压", Quantity::Potential),
        ("charge", Quantity::Charge),
        ("ladung", Quantity::Charge),
        ("carga", Quantity::Charge),
        ("carica", Quantity::Charge),
        ("lading", Quantity::Charge),
        ("ładunek", Quantity::Charge),
        ("заряд", Quantity::Charge),
        ("电荷", Quantity::Charge),
        ("電荷", Quantity::Charge),
    ];
    // Prefer the stem that appears first in the name, so that "time of current peak" is a time.
    STEMS
        .iter()
        .filter_map(|(stem, q)| lower.find(stem).map(|pos| (pos, *q)))
        .min_by_key(|(pos, _)| *pos)
        .map(|(_, q)| q)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn role_and_unit(cell: &str) -> (Option<Quantity>, Option<String>) {
        let (name, unit) = split_header(cell);
        let role = unit
            .as_deref()
            .and_then(Unit::parse)
            .map(|u| u.quantity)
            .or_else(|| role_from_name(&name));
        (role, unit.and_then(|u| Unit::parse(&u)).map(|u| u.symbol))
    }

    #[test]
    fn spellings_people_use() {
        let cases = [
            ("time_s", Quantity::Time, Some("s")),
            ("t (ms)", Quantity::Time, Some("ms")),
            ("Time/s", Quantity::Time, Some("s")),
            ("I / µA", Quantity::Current, Some("µA")),
            ("current [mA]", Quantity::Current, Some("mA")),
            ("E (V)", Quantity::Potential, Some("V")),
            ("potential/mV", Quantity::Potential, Some("mV")),
            ("Q/C", Quantity::Charge, Some("C")),
            ("Zeit in s", Quantity::Time, Some("s")),
            ("Strom (nA)", Quantity::Current, Some("nA")),
            ("Courant/uA", Quantity::Current, Some("µA")),
            ("Potencial (mV)", Quantity::Potential, Some("mV")),
            ("\"Time (s)\"", Quantity::Time, Some("s")),
            ("Elapsed time", Quantity::Time, None),
            ("Current", Quantity::Current, None),
            ("Signal (uA)", Quantity::Current, Some("µA")),
            ("mA", Quantity::Current, Some("mA")),
        ];
        for (cell, role, unit) in cases {
            let (r, u) = role_and_unit(cell);
            assert_eq!(r, Some(role), "role of {cell:?}");
            assert_eq!(u.as_deref(), unit, "unit of {cell:?}");
        }
    }

    #[test]
    fn unknown_names_have_no_role() {
        for cell in ["index", "point", "cycle", "temperature (K)", ""] {
            assert_eq!(role_and_unit(cell).0, None, "{cell:?}");
        }
    }
}
