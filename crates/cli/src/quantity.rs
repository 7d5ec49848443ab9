//! Reading quantities with units and uncertainties from the command line:
//! `0.0707`, `7.07mm2`, `0.0707+-0.0010cm2`, `5um`, `2mM`, `2e-6mol/cm3`, `7.2e-6±0.1e-6`.

use diffusor_fit::cell::Measured;

/// What a quantity measures, with its units (name, factor to SI) and the default unit.
#[derive(Debug, Clone, Copy)]
pub enum Kind {
    /// Area; default cm².
    Area,
    /// Length; default µm.
    Length,
    /// Concentration; default mM.
    Concentration,
    /// Diffusion coefficient; default cm²/s.
    Diffusion,
    /// Charge; default µC.
    Charge,
}

impl Kind {
    fn units(self) -> &'static [(&'static str, f64)] {
        match self {
            Kind::Area => &[
                ("cm2", 1e-4),
                ("cm^2", 1e-4),
                ("cm²", 1e-4),
                ("mm2", 1e-6),
                ("mm^2", 1e-6),
                ("mm²", 1e-6),
                ("um2", 1e-12),
                ("µm2", 1e-12),
                ("μm2", 1e-12),
                ("µm²", 1e-12),
                ("m2", 1.0),
                ("m^2", 1.0),
                ("m²", 1.0),
            ],
            Kind::Length => &[
                ("um", 1e-6),
                ("µm", 1e-6),
                ("μm", 1e-6),
                ("nm", 1e-9),
                ("mm", 1e-3),
                ("cm", 1e-2),
                ("m", 1.0),
            ],
            Kind::Concentration => &[
                ("mM", 1.0),
                ("mmol/L", 1.0),
                ("mmol/l", 1.0),
                ("uM", 1e-3),
                ("µM", 1e-3),
                ("μM", 1e-3),
                ("M", 1e3),
                ("mol/L", 1e3),
                ("mol/l", 1e3),
                ("mol/dm3", 1e3),
                ("mol/m3", 1.0),
                ("mol/cm3", 1e6),
            ],
            Kind::Diffusion => &[
                ("cm2/s", 1e-4),
                ("cm^2/s", 1e-4),
                ("cm²/s", 1e-4),
                ("m2/s", 1.0),
                ("m²/s", 1.0),
            ],
            Kind::Charge => &[
                ("uC", 1e-6),
                ("µC", 1e-6),
                ("μC", 1e-6),
                ("nC", 1e-9),
                ("mC", 1e-3),
                ("C", 1.0),
            ],
        }
    }

    fn default_unit(self) -> &'static str {
        match self {
            Kind::Area => "cm2",
            Kind::Length => "um",
            Kind::Concentration => "mM",
            Kind::Diffusion => "cm2/s",
            Kind::Charge => "uC",
        }
    }

    fn factor(self, unit: &str) -> Result<f64, String> {
        let unit = if unit.is_empty() {
            self.default_unit()
        } else {
            unit
        };
        self.units()
            .iter()
            .find(|(u, _)| *u == unit)
            .map(|(_, f)| *f)
            .ok_or_else(|| {
                let known: Vec<&str> = self.units().iter().map(|(u, _)| *u).collect();
                format!("unknown unit {unit:?} (use one of {})", known.join(", "))
            })
    }
}

/// Splits `12.5e-3mm` into (12.5e-3, "mm").
fn number_and_unit(text: &str) -> Result<(f64, &str), String> {
    let text = text.trim();
    let end = text
        .char_indices()
        .find(|&(i, c)| {
            !(c.is_ascii_digit()
                || c == '.'
                || ((c == '-' || c == '+')
                    && (i == 0 || matches!(text.as_bytes()[i - 1], b'e' | b'E')))
                || ((c == 'e' || c == 'E')
                    && text[i + 1..]
                        .chars()
                        .next()
                        .is_some_and(|n| n.is_ascii_digit() || n == '-' || n == '+')))
        })
        .map_or(text.len(), |(i, _)| i);
    let value: f64 = text[..end]
        .parse()
        .map_err(|_| format!("expected a number, found {:?}", &text[..end]))?;
    Ok((value, text[end..].trim()))
}

/// Parses `VALUE[UNIT][±UNC[UNIT]]` (`±` or `+-`); a unit written once applies to both.
pub fn parse(text: &str, kind: Kind) -> Result<Measured, String> {
    let (left, right) = match text.split_once("+-").or_else(|| text.split_once('±')) {
        Some((l, r)) => (l, Some(r)),
        None => (text, None),
    };
    let (value, value_unit) = number_and_unit(left)?;
    let (u, u_unit) = match right {
        Some(r) => {
            let (u, unit) = number_and_unit(r)?;
            (u, unit)
        }
        None => (0.0, ""),
    };
    let unit = if value_unit.is_empty() {
        u_unit
    } else {
        value_unit
    };
    let u_unit = if u_unit.is_empty() { unit } else { u_unit };
    let value = value * kind.factor(unit)?;
    let u = u * kind.factor(u_unit)?;
    if !(value > 0.0 && value.is_finite()) {
        return Err(format!("{text:?} must be positive"));
    }
    if !(u >= 0.0 && u.is_finite()) {
        return Err(format!(
            "the uncertainty in {text:?} must be zero or positive"
        ));
    }
    Ok(Measured::new(value, u))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn forms_people_type() {
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * b.abs().max(1e-300);
        let m = parse("0.0707", Kind::Area).unwrap();
        assert!(close(m.value, 7.07e-6) && m.u == 0.0);
        let m = parse("7.07mm2", Kind::Area).unwrap();
        assert!(close(m.value, 7.07e-6));
        let m = parse("0.0707+-0.0010cm2", Kind::Area).unwrap();
        assert!(close(m.value, 7.07e-6) && close(m.u, 1e-7));
        let m = parse("5um", Kind::Length).unwrap();
        assert!(close(m.value, 5e-6));
        let m = parse("0.5mm", Kind::Length).unwrap();
        assert!(close(m.value, 5e-4));
        let m = parse("2mM", Kind::Concentration).unwrap();
        assert!(close(m.value, 2.0));
        let m = parse("2e-6mol/cm3", Kind::Concentration).unwrap();
        assert!(close(m.value, 2.0));
        let m = parse("7.2e-6±0.1e-6", Kind::Diffusion).unwrap();
        assert!(close(m.value, 7.2e-10) && close(m.u, 1e-11));
        let m = parse("0.12+-0.01", Kind::Charge).unwrap();
        assert!(close(m.value, 1.2e-7) && close(m.u, 1e-8));
        let m = parse("2e-7C", Kind::Charge).unwrap();
        assert!(close(m.value, 2e-7));
    }

    #[test]
    fn refuses_nonsense() {
        assert!(parse("-1", Kind::Area).is_err());
        assert!(
            parse("1 furlong", Kind::Length)
                .unwrap_err()
                .contains("unknown unit")
        );
        assert!(
            parse("abc", Kind::Concentration)
                .unwrap_err()
                .contains("expected a number")
        );
    }
}
