//! The report's plots, built from a run's processed data and result.

use diffusor_fit::planar::{PlanarResult, Sensitivity, SensitivityPoint};
use diffusor_fit::window::BoundReason;

use crate::Replicates;
use crate::data::{Fitted, Processed};
use crate::fmt::{Display, display_of};
use crate::svg::{Axis, Key, Layer, Look, Plot, Shape, padded_range};
use crate::ticks::{Tick, UnitStyle};

/// A short name for what lies before the window, for the shaded span; `None` when nothing was
/// cut.
fn before_label(reason: &BoundReason) -> Option<&'static str> {
    match reason {
        BoundReason::ChargingTime { .. }
        | BoundReason::ChargingFraction { .. }
        | BoundReason::ChargingBelowNoise { .. }
        | BoundReason::ChargingExcess { .. } => Some("charging"),
        BoundReason::RiseTime { .. } => Some("rise time"),
        BoundReason::Given => Some("excluded"),
        _ => None,
    }
}

/// A short name for what lies after the window.
fn after_label(reason: &BoundReason) -> Option<&'static str> {
    match reason {
        BoundReason::Convection { .. } => Some("convection"),
        BoundReason::FallsBelowPlateau { .. } => Some("below plateau"),
        BoundReason::EdgeDiffusion { .. } => Some("edge diffusion"),
        BoundReason::Given => Some("excluded"),
        _ => None,
    }
}

/// `count` log-spaced times from `a` to `b`.
fn log_space(a: f64, b: f64, count: usize) -> Vec<f64> {
    if !(a > 0.0 && b > a) {
        return Vec::new();
    }
    (0..count)
        .map(|k| (a.ln() + (b.ln() - a.ln()) * k as f64 / (count - 1).max(1) as f64).exp())
        .collect()
}

/// The transient on logarithmic axes with the excluded regions shaded and the fit over the
/// window. Returns the plot and how many samples a log axis could not show (current ≤ 0).
pub(crate) fn transient(
    id: &str,
    data: &Processed,
    result: &dyn Fitted,
    fit_label: &str,
) -> Option<(Plot, usize)> {
    let points: Vec<(f64, f64)> = data
        .time_s
        .iter()
        .zip(&data.current_a)
        .map(|(&t, &i)| (t, if i > 0.0 { i } else { f64::NAN }))
        .collect();
    let hidden = data.current_a.iter().filter(|i| !(**i > 0.0)).count();
    let x = padded_range(data.time_s.iter().copied(), true)?;
    let y = padded_range(points.iter().map(|p| p.1), true)?;
    let window = result.window();
    let (lo, hi) = (window.lo.time_s, window.hi.time_s);
    let mut layers = Vec::new();
    let mut legend = vec![Key::line(Look::Trace, "measured")];
    let mut shaded = false;
    if let Some(label) = before_label(&window.lo.reason) {
        // A decaying transient is high at the start: the label goes below it there.
        layers.push(Layer::Span {
            x0: x.0,
            x1: lo,
            label: label.to_owned(),
            low: true,
        });
        shaded = true;
    }
    if let Some(label) = after_label(&window.hi.reason) {
        layers.push(Layer::Span {
            x0: hi,
            x1: x.1,
            label: label.to_owned(),
            low: false,
        });
        shaded = true;
    }
    layers.push(Layer::Line {
        points,
        look: Look::Trace,
    });
    let fit: Vec<(f64, f64)> = log_space(lo.max(x.0), hi, 240)
        .into_iter()
        .map(|t| (t, result.predict_a(t)))
        .collect();
    layers.push(Layer::Line {
        points: fit,
        look: Look::Fit,
    });
    legend.push(Key::line(Look::Fit, fit_label));
    if shaded {
        legend.push(Key::line(Look::Excluded, "left out of the fit"));
    }
    Some((
        Plot {
            id: format!("{id}-transient"),
            x: Axis::new("time after the step, t", UnitStyle::Si("s"), true, x),
            y: Axis::new("current, I", UnitStyle::Si("A"), true, y),
            layers,
            legend,
            description: "Current against time after the step on logarithmic axes, with the regions left out of the fit shaded".to_owned(),
        },
        hidden,
    ))
}

/// The Cottrell plot: I against (t − t0)^-½ over the window, with the fitted line from the
/// origin.
pub(crate) fn cottrell(id: &str, data: &Processed, result: &PlanarResult) -> Option<Plot> {
    let t0 = result.t0.value;
    let points: Vec<(f64, f64)> = data
        .window()
        .map(|i| (1.0 / (data.time_s[i] - t0).sqrt(), data.current_a[i]))
        .collect();
    let x_max = points.iter().map(|p| p.0).fold(f64::NAN, f64::max);
    let slope = result
        .params
        .iter()
        .find(|p| p.symbol == "S")?
        .estimate
        .value;
    let b = result
        .params
        .iter()
        .find(|p| p.symbol == "b")
        .map_or(0.0, |p| p.estimate.value);
    let x = (0.0, x_max * 1.05);
    let y = padded_range(
        points.iter().map(|p| p.1).chain([b, slope * x.1 + b]),
        false,
    )?;
    Some(Plot {
        id: format!("{id}-cottrell"),
        x: Axis::new("(t − t0)^−½", UnitStyle::Plain("s^−½"), false, x),
        y: Axis::new("current, I", UnitStyle::Si("A"), false, y),
        layers: vec![
            Layer::Line {
                points,
                look: Look::Trace,
            },
            Layer::Line {
                points: vec![(0.0, b), (x.1, slope * x.1 + b)],
                look: Look::Fit,
            },
        ],
        legend: vec![
            Key::line(Look::Trace, "measured, in the window"),
            Key::line(Look::Fit, "I = S·(t − t0)^−½ + b"),
        ],
        description: "Cottrell plot: current against the inverse square root of time over the fitting window, with the fitted line".to_owned(),
    })
}

/// Residuals against time over the window, with zero and ±2 residual SD.
pub(crate) fn residuals(
    id: &str,
    data: &Processed,
    result: &dyn Fitted,
    residual_sd_a: f64,
) -> Option<Plot> {
    let points: Vec<(f64, f64)> = data
        .window()
        .map(|i| {
            let t = data.time_s[i];
            (t, data.current_a[i] - result.predict_a(t))
        })
        .collect();
    let x = padded_range(points.iter().map(|p| p.0), true)?;
    let sd = residual_sd_a;
    let extent = points
        .iter()
        .map(|p| p.1.abs())
        .fold(2.0 * sd, f64::max)
        .max(f64::MIN_POSITIVE);
    let y = (-1.08 * extent, 1.08 * extent);
    Some(Plot {
        id: format!("{id}-residuals"),
        x: Axis::new("time after the step, t", UnitStyle::Si("s"), true, x),
        y: Axis::new("residual, I − I_fit", UnitStyle::Si("A"), false, y),
        layers: vec![
            Layer::Line {
                points,
                look: Look::Data,
            },
            Layer::HLine {
                y: 0.0,
                look: Look::Reference,
            },
            Layer::HLine {
                y: 2.0 * sd,
                look: Look::Bound,
            },
            Layer::HLine {
                y: -2.0 * sd,
                look: Look::Bound,
            },
        ],
        legend: vec![
            Key::line(Look::Data, "residual"),
            Key::line(Look::Reference, "zero"),
            Key::line(Look::Bound, "±2 residual SD"),
        ],
        description: "Residuals of the fit against time over the window".to_owned(),
    })
}

/// I·√(t − t0) on a log-time axis: the samples, the plateau bins with their standard errors
/// (departing bins open), the plateau the fit implies, the detected onsets and the window.
pub(crate) fn plateau(
    id: &str,
    data: &Processed,
    result: &PlanarResult,
    departure_z: f64,
) -> Option<Plot> {
    let t0 = result.t0.value;
    let p = &result.plateau;
    if p.bin_time_s.is_empty() {
        return None;
    }
    let samples: Vec<(f64, f64)> = data
        .time_s
        .iter()
        .zip(&data.current_a)
        .filter(|(t, _)| **t > t0)
        .map(|(&t, &i)| (t - t0, i * (t - t0).sqrt()))
        .collect();
    let x = padded_range(
        samples
            .iter()
            .map(|s| s.0)
            .chain(p.bin_time_s.iter().copied()),
        true,
    )?;
    let slope = result
        .params
        .iter()
        .find(|q| q.symbol == "S")?
        .estimate
        .value;
    let b = result
        .params
        .iter()
        .find(|q| q.symbol == "b")
        .map_or(0.0, |q| q.estimate.value);
    let curve: Vec<(f64, f64)> = log_space(p.bin_time_s[0], x.1, 200)
        .into_iter()
        .map(|t| (t, slope + b * t.sqrt()))
        .collect();
    // The vertical range follows the bins (± 3 SE) and the plateau, not the charging spike.
    let y = padded_range(
        p.bin_value
            .iter()
            .zip(&p.bin_std_error)
            .flat_map(|(v, se)| [v - 3.0 * se, v + 3.0 * se])
            .chain(curve.iter().map(|c| c.1)),
        false,
    )?;
    let y = {
        let span = (y.1 - y.0).max(1e-3 * y.1.abs());
        (y.0 - 0.25 * span, y.1 + 0.25 * span)
    };
    let (mut steady, mut departing) = (Vec::new(), Vec::new());
    let (mut steady_bars, mut departing_bars) = (Vec::new(), Vec::new());
    for k in 0..p.bin_time_s.len() {
        let (t, v, se) = (p.bin_time_s[k], p.bin_value[k], p.bin_std_error[k]);
        if p.bin_z[k].abs() > departure_z {
            departing.push((t, v));
            departing_bars.push((t, v - se, v + se));
        } else {
            steady.push((t, v));
            steady_bars.push((t, v - se, v + se));
        }
    }
    let mut layers = vec![
        Layer::Line {
            points: samples,
            look: Look::Context,
        },
        Layer::Line {
            points: curve,
            look: Look::Reference,
        },
        Layer::Bars {
            bars: steady_bars,
            look: Look::Point,
        },
        Layer::Bars {
            bars: departing_bars,
            look: Look::Flagged,
        },
        Layer::Markers {
            points: steady,
            shape: Shape::Circle,
            look: Look::Point,
        },
        Layer::Markers {
            points: departing.clone(),
            shape: Shape::Square,
            look: Look::Flagged,
        },
        Layer::VLine {
            x: result.window.lo.time_s - t0,
            look: Look::Bound,
            label: Some("window".to_owned()),
        },
        Layer::VLine {
            x: result.window.hi.time_s - t0,
            look: Look::Bound,
            label: Some("window".to_owned()),
        },
    ];
    let mut legend = vec![
        Key::line(Look::Context, "samples"),
        Key::marker(Look::Point, Shape::Circle, "bin mean ± SE"),
        Key::line(Look::Reference, "plateau S + b·√t (fit)"),
    ];
    if !departing.is_empty() {
        legend.push(Key::marker(
            Look::Flagged,
            Shape::Square,
            &format!("bin beyond {departure_z} SE"),
        ));
    }
    let mut onset = false;
    for (t, what) in [(p.rises_from_s, "rises"), (p.falls_from_s, "falls")] {
        if let Some(t) = t {
            layers.push(Layer::VLine {
                x: t - t0,
                look: Look::Onset,
                label: Some(format!("{what} from here")),
            });
            onset = true;
        }
    }
    if onset {
        legend.push(Key::line(Look::Onset, "detected departure"));
    }
    Some(Plot {
        id: format!("{id}-plateau"),
        x: Axis::new("time after the fitted onset, t − t0", UnitStyle::Si("s"), true, x),
        y: Axis::new("I·√(t − t0)", UnitStyle::Si("A·s^½"), false, y),
        layers,
        legend,
        description: "The product of current and the square root of time on a logarithmic time axis, with the plateau bins used to find where the window ends".to_owned(),
    })
}

/// How a sensitivity quantity is drawn: its axis title, unit style and the factor from SI.
fn sensitivity_axis(s: &Sensitivity) -> (&'static str, UnitStyle, f64) {
    match (s.quantity, display_of(s.unit)) {
        ("D", Display::Scaled(f, u)) => ("D", UnitStyle::Scaled(u), f),
        ("nAC", Display::Scaled(f, u)) => ("n·A·C", UnitStyle::Scaled(u), f),
        (_, Display::Engineering(u)) => ("slope S", UnitStyle::Si(u), 1.0),
        (_, Display::Scaled(f, u)) => ("result", UnitStyle::Scaled(u), f),
    }
}

/// The result against one window bound, with ±1 SE bars, the reported value and the bound
/// used.
pub(crate) fn sensitivity(id: &str, result: &PlanarResult, upper: bool) -> Option<Plot> {
    let s = result.sensitivity.as_ref()?;
    let points: &[SensitivityPoint] = if upper { &s.upper } else { &s.lower };
    if points.len() < 2 {
        return None;
    }
    let (name, unit, f) = sensitivity_axis(s);
    let reported = match s.quantity {
        "D" => result.diffusion_m2_s.map(|e| e.value),
        "nAC" => result.nac_mol_m.map(|e| e.value),
        _ => result
            .params
            .iter()
            .find(|p| p.symbol == "S")
            .map(|p| p.estimate.value),
    }
    .map(|v| v * f);
    let bound = if upper {
        result.window.hi.time_s
    } else {
        result.window.lo.time_s
    };
    let x = padded_range(points.iter().map(|p| p.bound_s).chain([bound]), true)?;
    let y = padded_range(
        points
            .iter()
            .flat_map(|p| [(p.value - p.std_error) * f, (p.value + p.std_error) * f])
            .chain(reported),
        false,
    )?;
    let mut layers = vec![
        Layer::VLine {
            x: bound,
            look: Look::Bound,
            label: Some("bound used".to_owned()),
        },
        Layer::Bars {
            bars: points
                .iter()
                .map(|p| {
                    (
                        p.bound_s,
                        (p.value - p.std_error) * f,
                        (p.value + p.std_error) * f,
                    )
                })
                .collect(),
            look: Look::Point,
        },
        Layer::Markers {
            points: points.iter().map(|p| (p.bound_s, p.value * f)).collect(),
            shape: Shape::Circle,
            look: Look::Point,
        },
    ];
    let mut legend = vec![Key::marker(
        Look::Point,
        Shape::Circle,
        &format!("{name} ± SE"),
    )];
    if let Some(r) = reported {
        layers.insert(
            0,
            Layer::HLine {
                y: r,
                look: Look::Fit,
            },
        );
        legend.push(Key::line(Look::Fit, "reported"));
    }
    legend.push(Key::line(Look::Bound, "bound used"));
    let which = if upper { "upper" } else { "lower" };
    Some(Plot {
        id: format!("{id}-sens-{which}"),
        x: Axis::new(
            if upper {
                "upper bound of the window"
            } else {
                "lower bound of the window"
            },
            UnitStyle::Si("s"),
            true,
            x,
        ),
        y: Axis::new(name, unit, false, y),
        layers,
        legend,
        description: format!(
            "The result refitted with the {which} bound of the window moved and the other held"
        ),
    })
}

/// Whether every run's interval is too short to see beside its marker on the replicate plot
/// (under 3 % of the axis).
pub(crate) fn intervals_hidden(intervals: &[(f64, f64)], axis: (f64, f64)) -> bool {
    let span = axis.1 - axis.0;
    span > 0.0 && intervals.iter().all(|(a, b)| (b - a).abs() < 0.03 * span)
}

/// The vertical range of the replicate plot.
pub(crate) fn replicate_range(rep: &Replicates, intervals: &[(f64, f64)]) -> Option<(f64, f64)> {
    let s = rep.summary.as_ref().ok()?;
    padded_range(
        intervals
            .iter()
            .flat_map(|(a, b)| [*a, *b])
            .chain(rep.estimates.iter().map(|e| e.value))
            .chain([s.ci95.lower, s.ci95.upper]),
        false,
    )
}

/// Per-run values with their 95 % intervals, the mean and its 95 % interval.
pub(crate) fn replicate_plot(rep: &Replicates, intervals: &[(f64, f64)]) -> Option<Plot> {
    let s = rep.summary.as_ref().ok()?;
    let n = rep.estimates.len();
    let xs: Vec<f64> = (1..=n).map(|k| k as f64).collect();
    let y = replicate_range(rep, intervals)?;
    let suspect = match &s.grubbs {
        diffusor_fit::replicates::GrubbsOutcome::Tested(g) if g.outlier => Some(g.suspect_index),
        _ => None,
    };
    let (mut plain, mut flagged) = (Vec::new(), Vec::new());
    for (k, e) in rep.estimates.iter().enumerate() {
        if Some(k) == suspect {
            flagged.push((xs[k], e.value));
        } else {
            plain.push((xs[k], e.value));
        }
    }
    let mut x = Axis::new("run", UnitStyle::Plain(""), false, (0.4, n as f64 + 0.6));
    x.fixed_ticks = Some(
        (1..=n)
            .map(|k| Tick {
                value: k as f64,
                label: Some(k.to_string()),
            })
            .collect(),
    );
    let mut legend = vec![
        Key::marker(Look::Point, Shape::Circle, "run, 95 % interval of its fit"),
        Key::line(Look::Fit, "mean"),
        Key::line(Look::Band, "95 % interval of the mean"),
    ];
    if suspect.is_some() {
        legend.push(Key::marker(Look::Flagged, Shape::Square, "Grubbs outlier"));
    }
    Some(Plot {
        id: "replicates".to_owned(),
        x,
        y: Axis::new(rep.quantity, UnitStyle::Scaled(rep.unit), false, y),
        layers: vec![
            Layer::YBand {
                y0: s.ci95.lower,
                y1: s.ci95.upper,
            },
            Layer::HLine {
                y: s.mean,
                look: Look::Fit,
            },
            Layer::Bars {
                bars: xs
                    .iter()
                    .zip(intervals)
                    .map(|(x, (a, b))| (*x, *a, *b))
                    .collect(),
                look: Look::Point,
            },
            Layer::Markers {
                points: plain,
                shape: Shape::Circle,
                look: Look::Point,
            },
            Layer::Markers {
                points: flagged,
                shape: Shape::Square,
                look: Look::Flagged,
            },
        ],
        legend,
        description: "Each run's result with the 95 % interval of its fit, and the mean of the runs with its 95 % interval".to_owned(),
    })
}
