//! Physical quantities and the unit spellings found in current–time exports.

use serde::Serialize;

/// The physical quantity a column holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Quantity {
    /// Time, SI unit second.
    Time,
    /// Electric current, SI unit ampere.
    Current,
    /// Electrode potential, SI unit volt.
    Potential,
    /// Electric charge, SI unit coulomb.
    Charge,
}

impl Quantity {
    /// The SI symbol the trace stores this quantity in.
    pub fn si_symbol(self) -> &'static str {
        match self {
            Quantity::Time => "s",
            Quantity::Current => "A",
            Quantity::Potential => "V",
            Quantity::Charge => "C",
        }
    }

    /// A lowercase English name for messages.
    pub fn name(self) -> &'static str {
        match self {
            Quantity::Time => "time",
            Quantity::Current => "current",
            Quantity::Potential => "potential",
            Quantity::Charge => "charge",
        }
    }
}

/// A unit recognised in a header or given by the user.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Unit {
    /// What the unit measures.
    pub quantity: Quantity,
    /// Canonical spelling, for example `µA` (for `uA`, `μA` and `µA` alike).
    pub symbol: String,
    /// Factor that converts a value in this unit to SI (s, A, V or C).
    pub to_si: f64,
}

impl Unit {
    /// The SI unit of `quantity` (factor 1).
    pub fn si(quantity: Quantity) -> Unit {
        Unit {
            quantity,
            symbol: quantity.si_symbol().to_owned(),
            to_si: 1.0,
        }
    }

    /// Converts a value in this unit to SI. Decimal prefixes divide by an exact power of ten,
    /// so `80 µA` becomes the double nearest to 8e-5 A, not one unit in the last place off.
    pub fn to_si_value(&self, value: f64) -> f64 {
        if self.to_si < 1.0 {
            let inverse = (1.0 / self.to_si).round();
            if (inverse * self.to_si - 1.0).abs() < 1e-12 {
                return value / inverse;
            }
        }
        value * self.to_si
    }

    /// Parses a unit as people write it: `s`, `ms`, `min`, `A`, `mA`, `µA`, `uA`, `nA`, `pA`,
    /// `V`, `mV`, `C`, `mC`, `µC`, and a few words (`sec`, `seconds`, `amps`, `volts`).
    /// Returns `None` for anything else, including current densities, which need an area.
    pub fn parse(text: &str) -> Option<Unit> {
        let t = text.trim();
        // Words first: they must match whole, case-insensitively.
        let lower = t.to_lowercase();
        let word = match lower.as_str() {
            "sec" | "secs" | "second" | "seconds" | "sekunden" | "secondes" | "segundos"
            | "secondi" => Some((Quantity::Time, "s", 1.0)),
            "msec" | "millisecond" | "milliseconds" => Some((Quantity::Time, "ms", 1e-3)),
            "min" | "mins" | "minute" | "minutes" | "minuten" => {
                Some((Quantity::Time, "min", 60.0))
            }
            "h" | "hr" | "hour" | "hours" => Some((Quantity::Time, "h", 3600.0)),
            "amp" | "amps" | "ampere" | "amperes" => Some((Quantity::Current, "A", 1.0)),
            "volt" | "volts" => Some((Quantity::Potential, "V", 1.0)),
            "coulomb" | "coulombs" => Some((Quantity::Charge, "C", 1.0)),
            _ => None,
        };
        if let Some((quantity, symbol, to_si)) = word {
            return Some(Unit {
                quantity,
                symbol: symbol.to_owned(),
                to_si,
            });
        }
        // Symbols are case-sensitive ("mA" is not "MA"), with µ written three ways.
        let mut chars = t.chars();
        let first = chars.next()?;
        let (prefix, factor, base) = match first {
            'µ' | 'μ' | 'u' => ("µ", 1e-6, chars.as_str()),
            'm' if t.len() > 1 => ("m", 1e-3, chars.as_str()),
            'n' => ("n", 1e-9, chars.as_str()),
            'p' => ("p", 1e-12, chars.as_str()),
            'k' => ("k", 1e3, chars.as_str()),
            _ => ("", 1.0, t),
        };
        let quantity = match base {
            "s" => Quantity::Time,
            "A" => Quantity::Current,
            "V" => Quantity::Potential,
            "C" => Quantity::Charge,
            _ => return None,
        };
        // Kiloseconds and kiloamperes do not occur in this trade; refuse rather than guess.
        if prefix == "k" && quantity != Quantity::Potential {
            return None;
        }
        Some(Unit {
            quantity,
            symbol: format!("{prefix}{base}"),
            to_si: factor,
        })
    }
}

/// Writes `value` in engineering notation with an SI prefix and `digits` significant digits,
/// as `12.3 µA` or `-450 mV`. Zero is written `0 unit`; non-finite values as they are.
pub fn format_si(value: f64, unit: &str, digits: usize) -> String {
    if !value.is_finite() {
        return format!("{value} {unit}");
    }
    if value == 0.0 {
        return format!("0 {unit}");
    }
    const PREFIXES: [(i32, &str); 11] = [
        (-15, "f"),
        (-12, "p"),
        (-9, "n"),
        (-6, "µ"),
        (-3, "m"),
        (0, ""),
        (3, "k"),
        (6, "M"),
        (9, "G"),
        (12, "T"),
        (15, "P"),
    ];
    let digits = digits.max(1);
    // Round to the requested significant digits first, so 999.96 µ becomes 1.000 m, not 1000 µ.
    let magnitude = value.abs().log10().floor() as i32;
    let rounded = {
        let scale = 10f64.powi(digits as i32 - 1 - magnitude);
        (value * scale).round() / scale
    };
    let magnitude = rounded.abs().log10().floor() as i32;
    let exp3 = (magnitude.div_euclid(3) * 3).clamp(-15, 15);
    let prefix = PREFIXES
        .iter()
        .find(|(e, _)| *e == exp3)
        .map_or("", |(_, p)| p);
    let mantissa = rounded / 10f64.powi(exp3);
    let int_digits = (mantissa.abs().log10().floor() as i32 + 1).max(1);
    let decimals = (digits as i32 - int_digits).max(0) as usize;
    format!("{mantissa:.decimals$} {prefix}{unit}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn engineering_notation() {
        assert_eq!(format_si(1.2345e-5, "A", 3), "12.3 µA");
        assert_eq!(format_si(-0.45, "V", 3), "-450 mV");
        assert_eq!(format_si(9.9996e-4, "A", 4), "1.000 mA");
        assert_eq!(format_si(1.5052e-9, "A", 5), "1.5052 nA");
        assert_eq!(format_si(0.0, "s", 3), "0 s");
        assert_eq!(format_si(60.0, "s", 3), "60.0 s");
    }

    #[test]
    fn prefixes_scale_to_si() {
        let cases = [
            ("s", Quantity::Time, 1.0),
            ("ms", Quantity::Time, 1e-3),
            ("µs", Quantity::Time, 1e-6),
            ("min", Quantity::Time, 60.0),
            ("A", Quantity::Current, 1.0),
            ("mA", Quantity::Current, 1e-3),
            ("µA", Quantity::Current, 1e-6),
            ("μA", Quantity::Current, 1e-6),
            ("uA", Quantity::Current, 1e-6),
            ("nA", Quantity::Current, 1e-9),
            ("pA", Quantity::Current, 1e-12),
            ("V", Quantity::Potential, 1.0),
            ("mV", Quantity::Potential, 1e-3),
            ("C", Quantity::Charge, 1.0),
            ("µC", Quantity::Charge, 1e-6),
            ("seconds", Quantity::Time, 1.0),
        ];
        for (text, quantity, to_si) in cases {
            let unit = Unit::parse(text).unwrap_or_else(|| panic!("{text} not parsed"));
            assert_eq!(unit.quantity, quantity, "{text}");
            assert_eq!(unit.to_si, to_si, "{text}");
        }
    }

    #[test]
    fn refuses_what_it_cannot_convert() {
        for text in ["mA/cm2", "MA", "ks", "", "Ohm", "m", "kA"] {
            assert!(Unit::parse(text).is_none(), "{text} should not parse");
        }
    }
}
