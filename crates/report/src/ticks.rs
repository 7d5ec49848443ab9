//! Axis ticks a reader can use: 1-2-5 steps on linear axes with one engineering prefix for the
//! whole axis, decades on logarithmic axes with each label in engineering notation.

use diffusor_trace::format_si;

/// How an axis writes its unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum UnitStyle {
    /// An SI unit that takes a prefix (s, A, A·s^½): the prefix is chosen for the axis.
    Si(&'static str),
    /// A unit that takes no prefix (s^-½): numbers as they are.
    Plain(&'static str),
    /// A unit written with a power-of-ten factor in the title, as `D / (10⁻⁶ cm²/s)`.
    Scaled(&'static str),
}

/// One tick.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Tick {
    /// Position in data units.
    pub value: f64,
    /// The label, for labelled ticks.
    pub label: Option<String>,
}

/// Ticks of an axis and the unit text its title ends with.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct AxisTicks {
    /// Major (labelled) ticks.
    pub major: Vec<Tick>,
    /// Minor (unlabelled) ticks.
    pub minor: Vec<f64>,
    /// The unit as the title shows it (`µA`, `10⁻⁶ cm²/s`, `s`), empty when the labels carry
    /// their own units (log axes).
    pub unit: String,
}

const SUPERSCRIPTS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];

/// `10` with a superscript exponent, as `10⁻⁶`.
pub(crate) fn power_of_ten(exponent: i32) -> String {
    let mut s = String::from("10");
    if exponent < 0 {
        s.push('⁻');
    }
    for d in exponent.unsigned_abs().to_string().bytes() {
        s.push(SUPERSCRIPTS[usize::from(d - b'0')]);
    }
    s
}

const PREFIXES: [(i32, &str); 9] = [
    (-15, "f"),
    (-12, "p"),
    (-9, "n"),
    (-6, "µ"),
    (-3, "m"),
    (0, ""),
    (3, "k"),
    (6, "M"),
    (9, "G"),
];

/// The engineering exponent (a multiple of 3) for numbers of magnitude `m`.
fn engineering_exponent(m: f64) -> i32 {
    if !(m > 0.0 && m.is_finite()) {
        return 0;
    }
    (m.log10().floor() as i32).div_euclid(3) * 3
}

/// The 1-2-5 step nearest (on a log scale) to `span / target`.
pub(crate) fn nice_step(span: f64, target: usize) -> f64 {
    let raw = span / target.max(1) as f64;
    if !(raw > 0.0 && raw.is_finite()) {
        return 1.0;
    }
    let magnitude = 10f64.powf(raw.log10().floor());
    let norm = raw / magnitude;
    // The boundaries are the geometric means of neighbouring steps: √2, √10 and √50.
    let factor = if norm < std::f64::consts::SQRT_2 {
        1.0
    } else if norm < 10f64.sqrt() {
        2.0
    } else if norm < 50f64.sqrt() {
        5.0
    } else {
        10.0
    };
    factor * magnitude
}

/// Decimals needed to write multiples of `step` (already divided by the axis factor) exactly.
fn decimals_for(step: f64) -> usize {
    let mut d = 0;
    while d < 12 {
        let scaled = step * 10f64.powi(d as i32);
        if (scaled - scaled.round()).abs() < 1e-6 * scaled.abs().max(1.0) {
            break;
        }
        d += 1;
    }
    d
}

/// Ticks for a linear axis from `lo` to `hi` with about `target` intervals.
pub(crate) fn linear_ticks(lo: f64, hi: f64, target: usize, unit: UnitStyle) -> AxisTicks {
    let step = nice_step(hi - lo, target);
    let first = (lo / step - 1e-9).ceil() as i64;
    let last = (hi / step + 1e-9).floor() as i64;
    let values: Vec<f64> = (first..=last)
        .map(|k| {
            let v = k as f64 * step;
            // An exact zero keeps "-0" out of the labels.
            if k == 0 { 0.0 } else { v }
        })
        .collect();
    let largest = values
        .iter()
        .map(|v| v.abs())
        .fold(lo.abs().max(hi.abs()), f64::max);
    let (factor_exp, unit_text) = match unit {
        UnitStyle::Si(u) => {
            let e = engineering_exponent(largest).clamp(-15, 9);
            let prefix = PREFIXES.iter().find(|(x, _)| *x == e).map_or("", |p| p.1);
            (e, format!("{prefix}{u}"))
        }
        UnitStyle::Plain(u) => (0, u.to_owned()),
        UnitStyle::Scaled(u) => {
            let e = if largest > 0.0 && largest.is_finite() {
                largest.log10().floor() as i32
            } else {
                0
            };
            if e == 0 {
                (0, u.to_owned())
            } else {
                (e, format!("{} {u}", power_of_ten(e)))
            }
        }
    };
    let scale = 10f64.powi(factor_exp);
    let decimals = decimals_for(step / scale);
    let major = values
        .iter()
        .map(|&v| Tick {
            value: v,
            label: Some(format!("{:.decimals$}", v / scale).replace('-', "−")),
        })
        .collect();
    AxisTicks {
        major,
        minor: Vec::new(),
        unit: unit_text,
    }
}

/// Ticks for a logarithmic axis from `lo` to `hi` (both positive): every decade labelled in
/// engineering notation (`100 µs`, `1 ms`…), or every second one past eight decades; the 2–9
/// multiples as minor ticks; 2 and 5 labelled too when the axis spans less than three decades,
/// so that a short axis still has enough labels to read a value off.
pub(crate) fn log_ticks(lo: f64, hi: f64, unit: UnitStyle) -> AxisTicks {
    let symbol = match unit {
        UnitStyle::Si(u) | UnitStyle::Plain(u) | UnitStyle::Scaled(u) => u,
    };
    let label = |v: f64| -> String {
        match unit {
            UnitStyle::Si(u) => format_si(v, u, 1),
            UnitStyle::Plain(_) | UnitStyle::Scaled(_) => {
                let e = v.log10().round() as i32;
                if (v / 10f64.powi(e) - 1.0).abs() < 1e-9 {
                    power_of_ten(e)
                } else {
                    let m = v / 10f64.powi(v.log10().floor() as i32);
                    format!("{}×{}", m.round(), power_of_ten(v.log10().floor() as i32))
                }
            }
        }
    };
    let (lo, hi) = (lo.min(hi), hi.max(lo));
    if !(lo > 0.0 && hi.is_finite()) {
        return AxisTicks {
            major: Vec::new(),
            minor: Vec::new(),
            unit: symbol.to_owned(),
        };
    }
    let first = (lo.log10() - 1e-9).floor() as i32;
    let last = (hi.log10() + 1e-9).ceil() as i32;
    let decades = hi.log10() - lo.log10();
    let every = if last - first > 8 { 2 } else { 1 };
    let inside = |v: f64| v >= lo * (1.0 - 1e-9) && v <= hi * (1.0 + 1e-9);
    let mut major = Vec::new();
    let mut minor = Vec::new();
    for e in first..=last {
        let decade = 10f64.powi(e);
        if inside(decade) {
            let labelled = e.rem_euclid(every) == 0;
            major.push(Tick {
                value: decade,
                label: labelled.then(|| label(decade)),
            });
        }
        for m in 2..10 {
            let v = f64::from(m) * decade;
            if !inside(v) {
                continue;
            }
            if decades < 3.0 && (m == 2 || m == 5) {
                major.push(Tick {
                    value: v,
                    label: Some(label(v)),
                });
            } else if every == 1 {
                minor.push(v);
            }
        }
    }
    major.sort_by(|a, b| a.value.total_cmp(&b.value));
    AxisTicks {
        major,
        minor,
        unit: match unit {
            UnitStyle::Si(_) => String::new(),
            _ => symbol.to_owned(),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn labels(t: &AxisTicks) -> Vec<String> {
        t.major.iter().filter_map(|t| t.label.clone()).collect()
    }

    #[test]
    fn steps_are_one_two_five() {
        // By hand, with the boundaries √2 = 1.41, √10 = 3.16 and √50 = 7.07 between steps:
        // 7.3/5 = 1.46 → 2; 0.034/5 = 0.0068 → 0.005; 880/5 = 176 → 200; 5/5 = 1 → 1;
        // 16/5 = 3.2 → 5; 36/5 = 7.2 → 10.
        assert_eq!(nice_step(7.3, 5), 2.0);
        assert!((nice_step(0.034, 5) - 0.005).abs() < 1e-15);
        assert_eq!(nice_step(880.0, 5), 200.0);
        assert_eq!(nice_step(5.0, 5), 1.0);
        assert_eq!(nice_step(16.0, 5), 5.0);
        assert_eq!(nice_step(36.0, 5), 10.0);
    }

    #[test]
    fn linear_current_axis_takes_one_prefix() {
        // 0 to 12.3 µA: steps of 2 µA (12.3/5 = 2.46 → 2), labelled in µA.
        let t = linear_ticks(0.0, 12.3e-6, 5, UnitStyle::Si("A"));
        assert_eq!(t.unit, "µA");
        assert_eq!(labels(&t), ["0", "2", "4", "6", "8", "10", "12"]);
        // Residuals of a few nA either side of zero, with a real minus sign.
        let t = linear_ticks(-7.5e-9, 7.5e-9, 6, UnitStyle::Si("A"));
        assert_eq!(t.unit, "nA");
        assert_eq!(labels(&t), ["−6", "−4", "−2", "0", "2", "4", "6"]);
        // Half-steps get a decimal: 0 to 1.2 mA in steps of 0.2 mA.
        let t = linear_ticks(0.0, 1.2e-3, 6, UnitStyle::Si("A"));
        assert_eq!(t.unit, "mA");
        assert_eq!(
            labels(&t),
            ["0.0", "0.2", "0.4", "0.6", "0.8", "1.0", "1.2"]
        );
    }

    #[test]
    fn scaled_axis_puts_the_power_in_the_title() {
        // D near 7 × 10⁻⁶ cm²/s: the title carries 10⁻⁶ and the labels are plain numbers.
        let t = linear_ticks(6.95e-6, 7.06e-6, 5, UnitStyle::Scaled("cm²/s"));
        assert_eq!(t.unit, "10⁻⁶ cm²/s");
        assert_eq!(labels(&t), ["6.96", "6.98", "7.00", "7.02", "7.04", "7.06"]);
    }

    #[test]
    fn log_axis_labels_decades_in_engineering_notation() {
        let t = log_ticks(2.5e-4, 20.0, UnitStyle::Si("s"));
        assert_eq!(labels(&t), ["1 ms", "10 ms", "100 ms", "1 s", "10 s"]);
        assert!(t.unit.is_empty());
        // Minor ticks at 2–9 × each decade inside the range: 3e-4…9e-4 (7), then 8 per full
        // decade for 1e-3, 1e-2, 1e-1 and 1, then 20 alone: 7 + 4·8 + 1 = 40.
        assert_eq!(t.minor.len(), 40);
        // Current decades from 1 nA to 1 mA.
        let t = log_ticks(1e-9, 1e-3, UnitStyle::Si("A"));
        assert_eq!(
            labels(&t),
            ["1 nA", "10 nA", "100 nA", "1 µA", "10 µA", "100 µA", "1 mA"]
        );
    }

    #[test]
    fn log_axis_thins_labels_past_eight_decades_and_adds_two_and_five_under_two() {
        let t = log_ticks(1e-12, 1.0, UnitStyle::Si("A"));
        assert_eq!(t.major.len(), 13);
        assert_eq!(
            labels(&t),
            ["1 pA", "100 pA", "10 nA", "1 µA", "100 µA", "10 mA", "1 A"]
        );
        let t = log_ticks(0.15, 8.0, UnitStyle::Si("s"));
        assert_eq!(labels(&t), ["200 ms", "500 ms", "1 s", "2 s", "5 s"]);
    }

    #[test]
    fn powers_of_ten_use_superscripts() {
        assert_eq!(power_of_ten(-6), "10⁻⁶");
        assert_eq!(power_of_ten(12), "10¹²");
        assert_eq!(power_of_ten(0), "10⁰");
    }
}
