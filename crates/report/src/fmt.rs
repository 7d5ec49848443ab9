//! Numbers as the report writes them: SI inside, converted here at the edge (D in cm²/s, areas in
//! cm², concentrations in mM, n·A·C in mol/cm, currents and times in engineering notation).

use diffusor_trace::format_si;

use crate::ticks::power_of_ten;

/// `v` in engineering notation (`format_si`) with a true minus sign, as the rest of the page
/// writes negative numbers.
pub(crate) fn si(v: f64, unit: &str, digits: usize) -> String {
    format_si(v, unit, digits).replace('-', "−")
}

/// `v` in scientific notation with `digits` significant digits, as `7.0099 × 10⁻⁶`; plain for
/// exponents −2…3.
pub(crate) fn sci(v: f64, digits: usize) -> String {
    if !v.is_finite() {
        return "—".to_owned();
    }
    if v == 0.0 {
        return "0".to_owned();
    }
    let digits = digits.max(1);
    let s = format!("{:.*e}", digits - 1, v);
    let Some((mantissa, exp)) = s.split_once('e') else {
        return s;
    };
    let exp: i32 = exp.parse().unwrap_or(0);
    let mantissa = mantissa.replace('-', "−");
    if (-2..=3).contains(&exp) {
        let decimals = (digits as i32 - 1 - exp).max(0) as usize;
        return format!("{v:.decimals$}").replace('-', "−");
    }
    format!("{mantissa} × {}", power_of_ten(exp))
}

/// Significant digits that show `value` to the second significant digit of `se`.
pub(crate) fn digits_for(value: f64, se: f64) -> usize {
    if !(se > 0.0 && se.is_finite() && value.is_finite() && value != 0.0) {
        return 5;
    }
    let d = (value.abs().log10().floor() - se.log10().floor()) as i64 + 2;
    d.clamp(2, 9) as usize
}

/// A value and its standard error in one unit-free form, as `7.00988 × 10⁻⁶ ± 5.3 × 10⁻¹⁰`.
pub(crate) fn with_se(value: f64, se: f64) -> String {
    format!("{} ± {}", sci(value, digits_for(value, se)), sci(se, 2))
}

/// A 95 % interval written with the precision of its value.
pub(crate) fn interval(lo: f64, hi: f64, value: f64, se: f64) -> String {
    let d = digits_for(value, se);
    format!("{} … {}", sci(lo, d), sci(hi, d))
}

/// How a result or input in SI is shown: a factor to the display unit and its name, or
/// engineering notation for units that take prefixes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Display {
    /// Multiply by the factor and write the unit after the number.
    Scaled(f64, &'static str),
    /// Engineering notation with this SI unit.
    Engineering(&'static str),
}

/// The display of an SI unit as the fit names it.
pub(crate) fn display_of(si_unit: &str) -> Display {
    match si_unit {
        // m²/s → cm²/s and m² → cm²: ×10⁴.
        "m²/s" => Display::Scaled(1e4, "cm²/s"),
        "m²" => Display::Scaled(1e4, "cm²"),
        // mol/m³ is numerically mM.
        "mol/m³" => Display::Scaled(1.0, "mM"),
        // mol/m → mol/cm: ×10⁻².
        "mol/m" => Display::Scaled(1e-2, "mol/cm"),
        "A" => Display::Engineering("A"),
        "s" => Display::Engineering("s"),
        "m" => Display::Engineering("m"),
        "A·s^½" => Display::Engineering("A·s^½"),
        "Ω" => Display::Engineering("Ω"),
        "F" => Display::Engineering("F"),
        "C" => Display::Engineering("C"),
        _ => Display::Scaled(1.0, ""),
    }
}

/// `v` (SI, in `si_unit`) with its display unit and `digits` significant digits.
pub(crate) fn quantity(v: f64, si_unit: &str, digits: usize) -> String {
    match display_of(si_unit) {
        Display::Scaled(f, "") => sci(v * f, digits),
        Display::Scaled(f, u) => format!("{} {u}", sci(v * f, digits)),
        Display::Engineering(u) => si(v, u, digits),
    }
}

/// A value with its standard error and both in the display unit, as
/// `7.00988 × 10⁻⁶ ± 5.3 × 10⁻¹⁰ cm²/s` or `10.1897 µA·s^½ ± 385 pA·s^½`.
pub(crate) fn quantity_with_se(v: f64, se: f64, si_unit: &str) -> String {
    match display_of(si_unit) {
        Display::Scaled(f, u) => {
            let s = with_se(v * f, se * f);
            if u.is_empty() { s } else { format!("{s} {u}") }
        }
        Display::Engineering(u) => format!("{} ± {}", si(v, u, digits_for(v, se)), si(se, u, 2)),
    }
}

/// An interval in the display unit.
pub(crate) fn quantity_interval(lo: f64, hi: f64, v: f64, se: f64, si_unit: &str) -> String {
    match display_of(si_unit) {
        Display::Scaled(f, u) => {
            let s = interval(lo * f, hi * f, v * f, se * f);
            if u.is_empty() { s } else { format!("{s} {u}") }
        }
        Display::Engineering(u) => {
            let d = digits_for(v, se);
            format!("{} … {}", si(lo, u, d), si(hi, u, d))
        }
    }
}

/// A percentage with sensible precision.
pub(crate) fn percent(p: f64) -> String {
    if !p.is_finite() {
        "—".to_owned()
    } else if p.abs() >= 10.0 {
        format!("{p:.1} %")
    } else if p.abs() >= 0.1 {
        format!("{p:.2} %")
    } else if p == 0.0 {
        "0 %".to_owned()
    } else {
        format!("{} %", sci(p, 2))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scientific_notation_with_superscripts() {
        assert_eq!(sci(7.009878e-6, 5), "7.0099 × 10⁻⁶");
        assert_eq!(sci(-5.3e-10, 2), "−5.3 × 10⁻¹⁰");
        assert_eq!(sci(0.0707, 3), "0.0707");
        assert_eq!(sci(12.5, 3), "12.5");
        assert_eq!(sci(1.0, 3), "1.00");
        assert_eq!(sci(f64::NAN, 3), "—");
    }

    #[test]
    fn precision_follows_the_standard_error() {
        // D = 7.009878e-6 with SE 5.3e-10: the SE's second digit is at 1e-11, so six digits.
        assert_eq!(digits_for(7.009878e-6, 5.3e-10), 6);
        assert_eq!(
            with_se(7.009878e-6, 5.298903e-10),
            "7.00988 × 10⁻⁶ ± 5.3 × 10⁻¹⁰"
        );
        assert_eq!(
            quantity_with_se(7.009878e-10, 5.298903e-14, "m²/s"),
            "7.00988 × 10⁻⁶ ± 5.3 × 10⁻¹⁰ cm²/s"
        );
    }

    #[test]
    fn units_are_converted_at_the_edge() {
        assert_eq!(quantity(7.07e-6, "m²", 3), "0.0707 cm²");
        assert_eq!(quantity(1.0, "mol/m³", 3), "1.00 mM");
        assert_eq!(quantity(2.02682e-8, "A", 3), "20.3 nA");
        assert_eq!(quantity(-4.9943e-4, "s", 4), "−499.4 µs");
        assert_eq!(quantity(1.0189e-5, "A·s^½", 4), "10.19 µA·s^½");
        assert_eq!(quantity(6.82e-5, "mol/m", 3), "6.82 × 10⁻⁷ mol/cm");
    }

    #[test]
    fn percentages() {
        assert_eq!(percent(49.502), "49.5 %");
        assert_eq!(percent(1.234), "1.23 %");
        assert_eq!(percent(0.000721), "7.2 × 10⁻⁴ %");
    }
}
