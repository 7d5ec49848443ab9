//! Numbers as the window shows them: scientific notation with a Unicode exponent, plain
//! decimals with a fixed number of significant digits, and SI prefixes through
//! [`diffusor_trace::format_si`].

/// The exponent of `value` in scientific notation once rounded to `digits` significant digits
/// (so that 9.99996 × 10⁻⁶ at 4 digits becomes 1.000 × 10⁻⁵, not 10.00 × 10⁻⁶).
fn exponent(value: f64, digits: usize) -> i32 {
    let digits = digits.max(1) as i32;
    let e = value.abs().log10().floor() as i32;
    let scale = 10f64.powi(digits - 1 - e);
    let rounded = (value.abs() * scale).round() / scale;
    rounded.log10().floor() as i32
}

/// `-6` as `⁻⁶`.
pub fn superscript(e: i32) -> String {
    e.to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect()
}

/// `value` as `7.010 × 10⁻⁶` with `digits` significant digits; `—` when not finite.
pub fn sci(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return "—".to_owned();
    }
    if value == 0.0 {
        return "0".to_owned();
    }
    let e = exponent(value, digits);
    mantissa_times(value, e, digits)
}

fn mantissa_times(value: f64, e: i32, digits: usize) -> String {
    let decimals = digits.max(1) - 1;
    let m = value / 10f64.powi(e);
    if e == 0 {
        format!("{m:.decimals$}")
    } else {
        format!("{m:.decimals$} × 10{}", superscript(e))
    }
}

/// Two bounds of an interval sharing the exponent of the first: `7.009 … 7.011 × 10⁻⁶`.
pub fn sci_interval(lo: f64, hi: f64, digits: usize) -> String {
    if !(lo.is_finite() && hi.is_finite()) {
        return "—".to_owned();
    }
    let reference = if lo != 0.0 { lo } else { hi };
    if reference == 0.0 {
        return "0 … 0".to_owned();
    }
    let e = exponent(reference, digits);
    let decimals = digits.max(1) - 1;
    let scale = 10f64.powi(e);
    if e == 0 {
        format!("{:.decimals$} … {:.decimals$}", lo, hi)
    } else {
        format!(
            "{:.decimals$} … {:.decimals$} × 10{}",
            lo / scale,
            hi / scale,
            superscript(e)
        )
    }
}

/// `value` as a plain decimal with `digits` significant digits and no trailing zeros after the
/// point: 0.0025, 10.22, 150. For numbers people type back into a field.
pub fn plain(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return value.to_string();
    }
    if value == 0.0 {
        return "0".to_owned();
    }
    let e = exponent(value, digits);
    let decimals = (digits as i32 - 1 - e).max(0) as usize;
    let text = format!("{value:.decimals$}");
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_owned()
    } else {
        text
    }
}

/// A percentage with two significant digits (three from 10 % up): `0.0076 %`, `1.0 %`, `49.5 %`.
pub fn percent(value: f64) -> String {
    if !value.is_finite() {
        return "—".to_owned();
    }
    let digits = if value.abs() >= 10.0 { 3 } else { 2 };
    if value == 0.0 {
        return "0 %".to_owned();
    }
    let e = exponent(value, digits);
    let decimals = (digits as i32 - 1 - e).max(0) as usize;
    format!("{value:.decimals$} %")
}

/// A time with an SI prefix and three significant digits: `2.50 ms`, `10.2 s`.
pub fn time(t_s: f64) -> String {
    diffusor_trace::format_si(t_s, "s", 3)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scientific_notation_rounds_into_the_next_exponent() {
        // Written out by hand from the definition of significant digits.
        assert_eq!(sci(7.009_878e-6, 4), "7.010 × 10⁻⁶");
        assert_eq!(sci(9.999_96e-6, 4), "1.000 × 10⁻⁵");
        assert_eq!(sci(-2.5e3, 2), "-2.5 × 10³");
        assert_eq!(sci(3.0, 3), "3.00");
        assert_eq!(sci(f64::NAN, 3), "—");
    }

    #[test]
    fn intervals_share_the_first_bound_exponent() {
        assert_eq!(
            sci_interval(7.008_84e-6, 7.010_92e-6, 4),
            "7.009 … 7.011 × 10⁻⁶"
        );
    }

    #[test]
    fn plain_numbers_keep_significant_digits_only() {
        assert_eq!(plain(0.002_499_999_999_99, 4), "0.0025");
        assert_eq!(plain(10.219_491, 4), "10.22");
        assert_eq!(plain(150.0, 4), "150");
        assert_eq!(plain(0.0, 4), "0");
    }

    #[test]
    fn percentages_have_two_or_three_digits() {
        assert_eq!(percent(0.007_56), "0.0076 %");
        assert_eq!(percent(1.0), "1.0 %");
        assert_eq!(percent(49.502), "49.5 %");
    }
}
