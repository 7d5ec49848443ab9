//! The planar Cottrell analysis of one step: background, windows, the fit (with the step onset
//! refined), D or n·A·C with intervals and an uncertainty budget, diagnostics and warnings.

use std::borrow::Cow;

use diffusor_trace::{Segment, Trace};
use nalgebra::DVector;
use serde::Serialize;

use crate::FitError;
use crate::cell::{Cell, Geometry};
use crate::constants::CM2_PER_S;
use crate::models::planar::{ShiftedCottrell, diffusion_from_slope, nac_from_slope};
use crate::regression::{LineFit, NoiseModel, Regressor, Weighting, Window, fit_line};
use crate::solver::{SolveOptions, solve};
use crate::window::{
    Bound, BoundChoice, BoundReason, Charging, PlateauCheck, WindowOptions, estimate_charging,
    fraction_time, plateau_check, range_switches,
};

/// What to subtract from the current before fitting.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum Background {
    /// Nothing (the fitted intercept, if any, takes up a constant background).
    #[default]
    None,
    /// The mean of the pre-step baseline segment.
    Baseline,
    /// A constant, in A, with the file's sign.
    Constant {
        /// The current to subtract, in A.
        current_a: f64,
    },
    /// A blank trace recorded with the same step: its current, interpolated linearly at each
    /// sample's time after the step, is subtracted.
    Blank {
        /// Times after the blank's step, in s, increasing.
        time_s: Vec<f64>,
        /// The blank's current, in A, with its file's sign.
        current_a: Vec<f64>,
    },
}

/// Everything the planar analysis can be told.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanarOptions {
    /// Window rules.
    pub window: WindowOptions,
    /// Fit an intercept (a constant background current).
    pub intercept: bool,
    /// Refine the step onset t0 in the fit.
    pub refine_t0: bool,
    /// Point weighting.
    pub weighting: Weighting,
    /// Fit the interval-averaged Cottrell current instead of the point value.
    pub interval_average: bool,
    /// Background subtraction.
    pub background: Background,
    /// Compute the window-sensitivity curves.
    pub sensitivity: bool,
}

impl Default for PlanarOptions {
    fn default() -> Self {
        PlanarOptions {
            window: WindowOptions::default(),
            intercept: true,
            refine_t0: true,
            weighting: Weighting::Ordinary,
            interval_average: false,
            background: Background::None,
            sensitivity: true,
        }
    }
}

/// A value with its standard error and 95 % interval, in the unit its field names.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Estimate {
    /// The value.
    pub value: f64,
    /// Standard error (from the fit, corrected for autocorrelation; inputs not included).
    pub std_error: f64,
    /// 95 % interval from Student's t with the effective degrees of freedom (fit only).
    pub ci95: [f64; 2],
}

/// A fitted parameter.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Param {
    /// Name in words.
    pub name: &'static str,
    /// Symbol.
    pub symbol: &'static str,
    /// SI unit.
    pub unit: &'static str,
    /// Value, standard error and interval.
    #[serde(flatten)]
    pub estimate: Estimate,
}

/// One input's share of the uncertainty of the result (GUM, JCGM 100:2008, §5.1).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BudgetEntry {
    /// The input.
    pub input: &'static str,
    /// Its value (SI).
    pub value: f64,
    /// Its SI unit.
    pub unit: &'static str,
    /// Its standard uncertainty (SI).
    pub standard_uncertainty: f64,
    /// Sensitivity coefficient ∂result/∂input.
    pub sensitivity: f64,
    /// |sensitivity|·u, in the result's unit.
    pub contribution: f64,
    /// Share of the combined variance, in %.
    pub share_percent: f64,
}

/// The uncertainty budget of the result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Budget {
    /// What the budget is for.
    pub quantity: &'static str,
    /// Its SI unit.
    pub unit: &'static str,
    /// Its value.
    pub value: f64,
    /// The inputs.
    pub entries: Vec<BudgetEntry>,
    /// Combined standard uncertainty u_c (root sum of squares of the contributions; the inputs
    /// are taken as uncorrelated).
    pub combined_standard_uncertainty: f64,
    /// Coverage factor k.
    pub coverage_factor: f64,
    /// Expanded uncertainty U = k·u_c.
    pub expanded_uncertainty: f64,
    /// What is exact and what is assumed.
    pub note: &'static str,
}

fn budget(
    quantity: &'static str,
    unit: &'static str,
    value: f64,
    inputs: Vec<(&'static str, f64, &'static str, f64, f64)>,
) -> Budget {
    let mut entries: Vec<BudgetEntry> = inputs
        .into_iter()
        .map(|(input, v, u_unit, u, c)| BudgetEntry {
            input,
            value: v,
            unit: u_unit,
            standard_uncertainty: u,
            sensitivity: c,
            contribution: (c * u).abs(),
            share_percent: 0.0,
        })
        .collect();
    let uc = entries
        .iter()
        .map(|e| e.contribution * e.contribution)
        .sum::<f64>()
        .sqrt();
    for e in &mut entries {
        e.share_percent = if uc > 0.0 {
            100.0 * (e.contribution / uc).powi(2)
        } else {
            0.0
        };
    }
    Budget {
        quantity,
        unit,
        value,
        entries,
        combined_standard_uncertainty: uc,
        coverage_factor: 2.0,
        expanded_uncertainty: 2.0 * uc,
        note: "n and F are exact (F = 96 485.332 12 C/mol, CODATA 2018, exact since the 2019 SI); inputs taken as uncorrelated; the slope's uncertainty is the fit's, widened for autocorrelated residuals; k = 2 gives about 95 % coverage for a normal distribution",
    }
}

/// How good the fit is.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diagnostics {
    /// Coefficient of determination.
    pub r2: f64,
    /// Residual standard deviation in A.
    pub residual_sd_a: f64,
    /// Durbin–Watson statistic.
    pub durbin_watson: f64,
    /// Lag-1 autocorrelation of the residuals.
    pub lag1_autocorrelation: f64,
    /// Runs-test z of the residual signs.
    pub runs_z: f64,
    /// Effective number of independent points.
    pub effective_points: f64,
    /// Degrees of freedom used for the intervals.
    pub degrees_of_freedom: f64,
    /// Factor by which the autocorrelation correction widened the slope's standard error.
    pub se_inflation: f64,
    /// How the autocorrelation was handled.
    pub autocorrelation_method: String,
    /// The weighting scheme.
    pub weighting: &'static str,
    /// What was regressed on what.
    pub regressor: &'static str,
}

/// A warning of the fitting engine, in plain language.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitWarning {
    /// What kind, for programs.
    pub code: WarningCode,
    /// For people.
    pub message: String,
}

/// Kinds of warnings.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum WarningCode {
    /// The window starts inside the charging region.
    ChargingInWindow,
    /// Natural convection was detected.
    Convection,
    /// Edge diffusion is significant for this radius.
    EdgeDiffusion,
    /// D lies outside the range usual for species in solution.
    UnusualD,
    /// Few points in the window.
    FewPoints,
    /// Residuals are structured or correlated.
    StructuredResiduals,
    /// Jumps that look like current-range switching inside the window.
    RangeSwitching,
    /// The step onset could not be refined.
    OnsetNotRefined,
    /// The inputs needed for D (or n·A·C) are missing.
    MissingInputs,
    /// Background subtraction asked for a baseline the trace does not have.
    NoBaseline,
    /// I·√t falls below its plateau inside the data.
    FallsBelowPlateau,
}

fn warn(code: WarningCode, message: String) -> FitWarning {
    FitWarning { code, message }
}

/// One point of a window-sensitivity curve.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SensitivityPoint {
    /// The moved bound, in s.
    pub bound_s: f64,
    /// The primary result with that bound (D in m²/s, n·A·C in mol/m, or the slope).
    pub value: f64,
    /// Its standard error.
    pub std_error: f64,
    /// Points in the window.
    pub points: usize,
}

/// The result as a function of each window bound.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Sensitivity {
    /// What is plotted: `D`, `nAC` or `slope`.
    pub quantity: &'static str,
    /// SI unit of the values.
    pub unit: &'static str,
    /// Lower bound moved, upper fixed.
    pub lower: Vec<SensitivityPoint>,
    /// Upper bound moved, lower fixed.
    pub upper: Vec<SensitivityPoint>,
    /// How the curves were computed.
    pub note: String,
}

/// The fitting window as decided.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WindowResult {
    /// Lower bound.
    pub lo: Bound,
    /// Upper bound.
    pub hi: Bound,
    /// Points inside.
    pub points: usize,
}

/// The result of the planar analysis of one step.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanarResult {
    /// Model identifier.
    pub model: &'static str,
    /// The model's equation.
    pub equation: &'static str,
    /// Its published source.
    pub source: &'static str,
    /// The electrode geometry entered.
    pub geometry: Geometry,
    /// `forward` (D from the fit) or `inverse` (n·A·C from a known D).
    pub mode: &'static str,
    /// Step onset relative to the importer's, in s (0 when not refined).
    pub t0: Estimate,
    /// Whether t0 was refined.
    pub t0_refined: bool,
    /// The window.
    pub window: WindowResult,
    /// The charging estimate, when there is one.
    pub charging: Option<Charging>,
    /// The plateau check on I·√t.
    pub plateau: PlateauCheck,
    /// Fitted parameters (slope S, intercept b, t0).
    pub params: Vec<Param>,
    /// Correlation matrix of the parameters, in their order.
    pub correlations: Vec<Vec<f64>>,
    /// Diffusion coefficient in m²/s (forward mode, when A and C are known).
    pub diffusion_m2_s: Option<Estimate>,
    /// n·A·C in mol/m (inverse mode).
    pub nac_mol_m: Option<Estimate>,
    /// Electroactive area in m² (inverse mode, with C given).
    pub area_m2: Option<Estimate>,
    /// Uncertainty budget of D (forward) or n·A·C (inverse).
    pub budget: Option<Budget>,
    /// Fit quality.
    pub diagnostics: Diagnostics,
    /// Background subtracted, in words.
    pub background: String,
    /// Times of suspected current-range switches in the window, in s.
    pub range_switches_s: Vec<f64>,
    /// Window sensitivity.
    pub sensitivity: Option<Sensitivity>,
    /// Warnings in plain language.
    pub warnings: Vec<FitWarning>,
}

impl PlanarResult {
    fn param(&self, symbol: &str) -> Option<f64> {
        self.params
            .iter()
            .find(|p| p.symbol == symbol)
            .map(|p| p.estimate.value)
    }

    /// The fitted current at `t_s` seconds after the step (the step's own time axis, before
    /// the t0 shift), in A with the faradaic sign positive; NaN at or before the fitted onset.
    pub fn predict_a(&self, t_s: f64) -> f64 {
        let s = self.param("S").unwrap_or(f64::NAN);
        let b = self.param("b").unwrap_or(0.0);
        let dt = t_s - self.t0.value;
        if dt > 0.0 {
            s / dt.sqrt() + b
        } else {
            f64::NAN
        }
    }
}

/// Why the analysis could not be done.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum AnalysisError {
    /// An impossible cell entry.
    #[error("{0}")]
    Cell(String),
    /// Too few points for the window.
    #[error(
        "only {points} points in the window {lo_s:.4e}–{hi_s:.4e} s; at least {needed} are needed (widen the window or check the step onset)"
    )]
    WindowTooSmall {
        /// Points found.
        points: usize,
        /// Points needed.
        needed: usize,
        /// Lower bound, s.
        lo_s: f64,
        /// Upper bound, s.
        hi_s: f64,
    },
    /// The bounds leave no window.
    #[error(
        "the window would end at {} before it starts at {}: it ends {why}{hint}",
        crate::fmt_s(*hi_s),
        crate::fmt_s(*lo_s)
    )]
    BadWindow {
        /// Lower bound, s.
        lo_s: f64,
        /// Upper bound, s.
        hi_s: f64,
        /// Why the upper bound is where it is.
        why: String,
        /// What to do about it (may be empty).
        hint: &'static str,
    },
    /// The blank does not cover the trace.
    #[error("the blank covers {from_s} s to {to_s} s, not the whole fitted range")]
    BlankRange {
        /// Blank start, s.
        from_s: f64,
        /// Blank end, s.
        to_s: f64,
    },
    /// The numerical fit failed.
    #[error("the fit failed: {0}")]
    Fit(#[from] FitError),
}

fn estimate(value: f64, se: f64, dof: f64) -> Estimate {
    let t = crate::special::t975(dof);
    Estimate {
        value,
        std_error: se,
        ci95: [value - t * se, value + t * se],
    }
}

/// Interpolates the blank linearly at `t`.
fn interpolate(time_s: &[f64], current_a: &[f64], t: f64) -> Option<f64> {
    let k = time_s.partition_point(|&x| x < t);
    if k == 0 {
        return (time_s.first() == Some(&t)).then(|| current_a[0]);
    }
    if k >= time_s.len() {
        return None;
    }
    let (t0, t1) = (time_s[k - 1], time_s[k]);
    let f = (t - t0) / (t1 - t0);
    Some(current_a[k - 1] + f * (current_a[k] - current_a[k - 1]))
}

/// Analyses the step `segment` of `trace` as planar semi-infinite diffusion.
pub fn analyze(
    trace: &Trace,
    segment: &Segment,
    cell: &Cell,
    options: &PlanarOptions,
) -> Result<PlanarResult, AnalysisError> {
    cell.validate().map_err(AnalysisError::Cell)?;
    let mut warnings = Vec::new();
    let range = segment.start..segment.end;
    let sign = segment
        .polarity
        .or(trace.polarity)
        .map_or(1.0, diffusor_trace::Polarity::factor);

    // Times from the segment's own step, positive ones only.
    let all_t = &trace.time_s[range.clone()];
    let first_pos = all_t.partition_point(|&t| t - segment.start_time_s <= 0.0);
    let time: Cow<'_, [f64]> = if segment.start_time_s == 0.0 {
        Cow::Borrowed(&all_t[first_pos..])
    } else {
        Cow::Owned(
            all_t[first_pos..]
                .iter()
                .map(|t| t - segment.start_time_s)
                .collect(),
        )
    };
    let raw = &trace.current_a[range][first_pos..];
    let (background_text, constant_bg) = match &options.background {
        Background::None => ("none".to_owned(), Some(0.0)),
        Background::Baseline => match &trace.baseline {
            Some(b) => (
                format!(
                    "pre-step baseline mean {} subtracted",
                    diffusor_trace::format_si(b.mean_a, "A", 3)
                ),
                Some(b.mean_a),
            ),
            None => {
                warnings.push(warn(
                    WarningCode::NoBaseline,
                    "the trace has no samples before the step, so no baseline was subtracted"
                        .to_owned(),
                ));
                ("none (no baseline in the trace)".to_owned(), Some(0.0))
            }
        },
        Background::Constant { current_a } => (
            format!(
                "constant {} subtracted",
                diffusor_trace::format_si(*current_a, "A", 3)
            ),
            Some(*current_a),
        ),
        Background::Blank { .. } => ("blank trace subtracted (interpolated)".to_owned(), None),
    };
    let current: Cow<'_, [f64]> = match (constant_bg, &options.background) {
        (Some(bg), _) if bg == 0.0 && sign == 1.0 => Cow::Borrowed(raw),
        (Some(bg), _) => Cow::Owned(raw.iter().map(|c| (c - bg) * sign).collect()),
        (None, Background::Blank { time_s, current_a }) => {
            let mut out = Vec::with_capacity(raw.len());
            for (t, c) in time.iter().zip(raw) {
                let b = interpolate(time_s, current_a, *t).ok_or(AnalysisError::BlankRange {
                    from_s: time_s.first().copied().unwrap_or(f64::NAN),
                    to_s: time_s.last().copied().unwrap_or(f64::NAN),
                })?;
                out.push((c - b) * sign);
            }
            Cow::Owned(out)
        }
        (None, _) => Cow::Borrowed(raw),
    };
    analyze_data(&time, &current, cell, options, background_text, warnings)
}

fn slice_window<'a>(t: &'a [f64], y: &'a [f64], a: usize, b: usize, t0: f64) -> Window<'a> {
    Window {
        time_s: &t[a..b],
        current_a: &y[a..b],
        t_before_s: a.checked_sub(1).map(|k| t[k]),
        t_after_s: t.get(b).copied(),
        t0_s: t0,
    }
}

/// The planar analysis on prepared data: times after the step (s, positive, increasing) and
/// the faradaic current (A, positive for the faradaic direction, background removed).
pub fn analyze_data(
    time: &[f64],
    current: &[f64],
    cell: &Cell,
    options: &PlanarOptions,
    background: String,
    mut warnings: Vec<FitWarning>,
) -> Result<PlanarResult, AnalysisError> {
    cell.validate().map_err(AnalysisError::Cell)?;
    let wopt = &options.window;
    let n = time.len();
    if n < wopt.min_points {
        return Err(AnalysisError::WindowTooSmall {
            points: n,
            needed: wopt.min_points,
            lo_s: time.first().copied().unwrap_or(0.0),
            hi_s: time.last().copied().unwrap_or(0.0),
        });
    }
    let regressor_at = |a: usize| -> Regressor {
        if options.interval_average {
            Regressor::IntervalAverage {
                t_before_s: if a == 0 { 0.0 } else { time[a - 1] },
            }
        } else {
            Regressor::InverseSqrt
        }
    };
    let area = cell.effective_area_m2();
    let conc = cell.conc_mol_m3;
    let known_d = cell.known_d_m2_s;

    // A provisional line where I·√t is flat, away from the charging current and from
    // convection; failing that, over the middle of the log-time span.
    let (pa, pb) = crate::window::provisional_span(time, current).unwrap_or_else(|| {
        let (lt0, lt1) = (time[0].ln(), time[n - 1].ln());
        let ta = (lt0 + 0.25 * (lt1 - lt0)).exp();
        let tb = (lt0 + 0.6 * (lt1 - lt0)).exp();
        let (pa, pb) = (
            time.partition_point(|&t| t < ta),
            time.partition_point(|&t| t <= tb),
        );
        if pb - pa < 10 {
            let pa = n / 4;
            (pa, (n * 3 / 4).max(pa + 10).min(n))
        } else {
            (pa, pb)
        }
    });
    let provisional = fit_line(
        &slice_window(time, current, pa, pb, 0.0),
        regressor_at(pa),
        Weighting::Ordinary,
        options.intercept,
    )?;
    let refine = options.refine_t0 && !options.interval_average;
    // The charging current with a free onset, fitted on the points before the provisional
    // span, when the window's start is to be found and Ru·Cdl was not entered.
    let joint = match (wopt.lo, wopt.ru_ohm, wopt.cdl_f) {
        (BoundChoice::Auto, Some(_), Some(_)) | (BoundChoice::At(_), _, _) => None,
        (BoundChoice::Auto, _, _) => estimate_charging(
            time,
            current,
            pa.max(6),
            (pa, pb),
            options.intercept,
            provisional.residual_sd,
        ),
    };
    // The importer's onset can be a fraction of a sample off, which bends everything at short
    // times; a first estimate of t0 keeps the charging and plateau checks below from mistaking
    // that bend for charging or a departure. With a resolved charging current it comes from the
    // joint fit, else from the provisional span.
    let t0_p = match &joint {
        Some((_, t0, _)) if refine => *t0,
        _ if refine => refine_onset(
            &time[pa..pb],
            &current[pa..pb],
            &provisional,
            0.0,
            options.intercept,
        )
        .unwrap_or(0.0),
        _ => 0.0,
    };
    let t0_p = if t0_p < time[0] { t0_p } else { 0.0 };
    let provisional = if t0_p == 0.0 {
        provisional
    } else {
        fit_line(
            &slice_window(time, current, pa, pb, t0_p),
            regressor_at(pa),
            Weighting::Ordinary,
            options.intercept,
        )?
    };
    let (s_p, b_p) = (provisional.slope, provisional.intercept.unwrap_or(0.0));

    // Lower bound.
    let mut charging = None;
    let lo = match wopt.lo {
        BoundChoice::At(t) => Bound::new(t, false, BoundReason::Given),
        BoundChoice::Auto => {
            let mut candidates: Vec<(f64, BoundReason)> = Vec::new();
            if let (Some(ru), Some(cdl)) = (wopt.ru_ohm, wopt.cdl_f) {
                let tau = ru * cdl;
                charging = Some(Charging {
                    tau_s: tau,
                    tau_std_error_s: None,
                    amplitude_a: None,
                    fitted: false,
                    points: 0,
                });
                candidates.push((
                    wopt.k_tau * tau,
                    BoundReason::ChargingTime {
                        tau_s: tau,
                        k: wopt.k_tau,
                    },
                ));
            } else {
                if let Some((ch, _, sigma)) = &joint {
                    candidates.push((
                        wopt.k_tau * ch.tau_s,
                        BoundReason::ChargingTime {
                            tau_s: ch.tau_s,
                            k: wopt.k_tau,
                        },
                    ));
                    if let Some(a) = ch.amplitude_a {
                        candidates.push((
                            fraction_time(a, ch.tau_s, s_p, wopt.charging_fraction),
                            BoundReason::ChargingFraction {
                                fraction: wopt.charging_fraction,
                            },
                        ));
                        // A tenth of the noise: a remnant at the noise level still biased the
                        // slope by about a third of its standard error on synthetic traces.
                        let floor = 0.1 * *sigma;
                        if a > floor && floor > 0.0 {
                            candidates.push((
                                ch.tau_s * (a / floor).ln(),
                                BoundReason::ChargingBelowNoise { noise_sd_a: *sigma },
                            ));
                        }
                    }
                    charging = Some(ch.clone());
                }
            }
            // Whatever τ said, points whose excess over the line is still significant stay out.
            let sigma = provisional.residual_sd;
            let significant = |i: usize| {
                let model = s_p / (time[i] - t0_p).sqrt() + b_p;
                current[i] - model > (wopt.charging_fraction * model).max(3.0 * sigma)
            };
            let mut excess_points = 0;
            let mut quiet = 0;
            for i in 0..pa.max(3).min(n) {
                if significant(i) {
                    excess_points = i + 1;
                    quiet = 0;
                } else {
                    quiet += 1;
                    if quiet >= 3 {
                        break;
                    }
                }
            }
            if excess_points > 0 && excess_points < n {
                candidates.push((
                    time[excess_points],
                    BoundReason::ChargingExcess {
                        points: excess_points,
                        tau_resolved: charging.as_ref().is_some_and(|c| c.fitted),
                    },
                ));
            }
            if let Some(rise) = wopt.rise_time_s {
                candidates.push((
                    wopt.k_tau * rise,
                    BoundReason::RiseTime {
                        rise_time_s: rise,
                        k: wopt.k_tau,
                    },
                ));
            }
            match candidates.into_iter().max_by(|a, b| a.0.total_cmp(&b.0)) {
                Some((t, reason)) if t > time[0] => Bound::new(t, true, reason),
                _ => Bound::new(time[0], true, BoundReason::FirstSample),
            }
        }
    };

    // Upper bound. The plateau check needs the noise of a bin mean; its correlation is read
    // from the variogram of the provisional residuals after the lower bound (at most 50 000
    // of them), which a slow departure such as convection does not disturb at short lags.
    let lo_index = time.partition_point(|&t| t < lo.time_s);
    // Without a resolved charging current, t0 came from the provisional span, where the
    // transient is least sensitive to it; refined again from the lower bound on, where the
    // early points pin it, its bend no longer reads as a departure at the start of the
    // plateau check (seen at 10 µs sampling).
    let (t0_p, s_p, b_p) = match (&joint, refine) {
        (None, true) if pb > lo_index + 10 => {
            match refine_onset(
                &time[lo_index..pb],
                &current[lo_index..pb],
                &provisional,
                t0_p,
                options.intercept,
            ) {
                Ok(t0) if t0 < time[0] => {
                    let line = fit_line(
                        &slice_window(time, current, pa, pb, t0),
                        regressor_at(pa),
                        Weighting::Ordinary,
                        options.intercept,
                    )?;
                    (t0, line.slope, line.intercept.unwrap_or(0.0))
                }
                _ => (t0_p, s_p, b_p),
            }
        }
        _ => (t0_p, s_p, b_p),
    };
    let tail = joint
        .as_ref()
        .and_then(|(c, _, _)| c.amplitude_a.map(|a| (a, c.tau_s)));
    let tail_at = |t: f64| match tail {
        Some((a, tau)) if t < 50.0 * tau => a * (-t / tau).exp(),
        _ => 0.0,
    };
    let stretch = (n - lo_index).min(50_000);
    let residuals: Vec<f64> = (lo_index..lo_index + stretch)
        .map(|i| current[i] - s_p / (time[i] - t0_p).sqrt() - b_p - tail_at(time[i]))
        .collect();
    let (noise_sd, noise) = NoiseModel::from_variogram(&residuals, 100);
    let plateau = plateau_check(
        time,
        current,
        lo.time_s,
        t0_p,
        options.intercept,
        noise_sd,
        noise,
        wopt.departure_z,
        tail,
    );
    let provisional_d = match (area, conc, known_d) {
        (_, _, Some(d)) => Some(d.value),
        (Some(a), Some(c), None) => Some(diffusion_from_slope(s_p, cell.n, a.value, c.value)),
        _ => None,
    };
    let edge = match (cell.geometry, cell.disk_radius_m(), provisional_d) {
        (Geometry::Planar | Geometry::Microdisk, Some(r), Some(d)) if d > 0.0 => Some((
            (wopt.edge_share_limit * r).powi(2) / (std::f64::consts::PI * d),
            r,
        )),
        _ => None,
    };
    let hi = match wopt.hi {
        BoundChoice::At(t) => Bound::new(t, false, BoundReason::Given),
        BoundChoice::Auto => {
            let mut hi = Bound::new(time[n - 1], true, BoundReason::EndOfData);
            let departures = [
                plateau.rises_from_s.map(|t| {
                    (
                        t,
                        BoundReason::Convection {
                            onset_s: t,
                            z: plateau.departure_z,
                        },
                    )
                }),
                plateau.falls_from_s.map(|t| {
                    (
                        t,
                        BoundReason::FallsBelowPlateau {
                            onset_s: t,
                            z: plateau.departure_z,
                        },
                    )
                }),
                edge.map(|(t, r)| {
                    (
                        t,
                        BoundReason::EdgeDiffusion {
                            share: wopt.edge_share_limit,
                            radius_m: r,
                        },
                    )
                }),
            ];
            for (t, reason) in departures.into_iter().flatten() {
                if t < hi.time_s {
                    hi = Bound::new(t, true, reason);
                }
            }
            hi
        }
    };
    if !(hi.time_s > lo.time_s) {
        return Err(AnalysisError::BadWindow {
            lo_s: lo.time_s,
            hi_s: hi.time_s,
            why: hi.description.clone(),
            hint: if matches!(hi.reason, BoundReason::EdgeDiffusion { .. }) {
                "; edge diffusion dominates this electrode at these times, so the planar model does not apply — use the microdisk model"
            } else {
                ""
            },
        });
    }
    let a = time.partition_point(|&t| t < lo.time_s);
    let b = time.partition_point(|&t| t <= hi.time_s);
    let points = b - a;
    if points < wopt.min_points {
        return Err(AnalysisError::WindowTooSmall {
            points,
            needed: wopt.min_points,
            lo_s: lo.time_s,
            hi_s: hi.time_s,
        });
    }

    // The fit: the line at t0 = 0, then t0 refined and the line again.
    let weighting = options.weighting;
    let refine = options.refine_t0 && !options.interval_average;
    // With t0 to be refined, the provisional line is a good enough start; the line over the
    // window is fitted once, at the refined t0.
    let mut line = if refine {
        provisional.clone()
    } else {
        fit_line(
            &slice_window(time, current, a, b, t0_p),
            regressor_at(a),
            weighting,
            options.intercept,
        )?
    };
    let mut t0 = Estimate {
        value: 0.0,
        std_error: 0.0,
        ci95: [0.0, 0.0],
    };
    let mut t0_refined = false;
    // With t0 free, the covariance of (S, b) is the three-parameter one.
    let mut joint: Option<nalgebra::DMatrix<f64>> = None;
    if refine {
        match refine_onset(&time[a..b], &current[a..b], &line, t0_p, options.intercept) {
            Ok(t0_value) => {
                line = fit_line(
                    &slice_window(time, current, a, b, t0_value),
                    regressor_at(a),
                    weighting,
                    options.intercept,
                )?;
                joint = if weighting == Weighting::Ordinary {
                    onset_covariance(&time[a..b], &line, t0_value, options.intercept)
                } else {
                    None
                };
                let k = if options.intercept { 2 } else { 1 };
                let t0_se = joint.as_ref().map_or(f64::NAN, |c| c[(k, k)].sqrt());
                t0 = estimate(t0_value, t0_se, line.degrees_of_freedom);
                t0_refined = true;
            }
            Err(message) => {
                warnings.push(warn(WarningCode::OnsetNotRefined, message));
                line = fit_line(
                    &slice_window(time, current, a, b, 0.0),
                    regressor_at(a),
                    weighting,
                    options.intercept,
                )?;
            }
        }
    }
    // The slope's variance with t0 free, relative to t0 fixed (1 when t0 was not refined).
    let t0_inflation = joint
        .as_ref()
        .map_or(1.0, |c| (c[(0, 0)] / line.covariance[0][0]).max(1.0));

    let dof = line.degrees_of_freedom;
    let slope_se = line.slope_std_error() * t0_inflation.sqrt();
    let slope = estimate(line.slope, slope_se, dof);
    let mut params = vec![Param {
        name: "Cottrell slope",
        symbol: "S",
        unit: "A·s^½",
        estimate: slope,
    }];
    let intercept_se = match (&joint, line.intercept_std_error()) {
        (Some(c), Some(se)) => Some(c[(1, 1)].sqrt().max(se)),
        (_, se) => se,
    };
    if let (Some(b_value), Some(b_se)) = (line.intercept, intercept_se) {
        params.push(Param {
            name: "background current (intercept)",
            symbol: "b",
            unit: "A",
            estimate: estimate(b_value, b_se, dof),
        });
    }
    if t0_refined {
        params.push(Param {
            name: "step onset shift",
            symbol: "t0",
            unit: "s",
            estimate: t0,
        });
    }
    let correlations = match &joint {
        Some(c) => correlation(
            &(0..c.nrows())
                .map(|i| (0..c.ncols()).map(|j| c[(i, j)]).collect())
                .collect::<Vec<Vec<f64>>>(),
        ),
        None => correlation(&line.covariance),
    };

    // Results.
    let mut diffusion_m2_s = None;
    let mut nac_mol_m = None;
    let mut area_m2 = None;
    let mut result_budget = None;
    let t = crate::special::t975(dof);
    let mode;
    if let Some(d_known) = known_d {
        mode = "inverse";
        let nac = nac_from_slope(line.slope, d_known.value);
        let se = nac * slope_se / line.slope;
        let lo_s = line.slope - t * slope_se;
        let hi_s = line.slope + t * slope_se;
        nac_mol_m = Some(Estimate {
            value: nac,
            std_error: se,
            ci95: [
                nac_from_slope(lo_s, d_known.value),
                nac_from_slope(hi_s, d_known.value),
            ],
        });
        let slope_input = ("Cottrell slope S", line.slope, "A·s^½", slope_se);
        let d_input = (
            "known diffusion coefficient D",
            d_known.value,
            "m²/s",
            d_known.u,
        );
        result_budget = Some(match conc {
            Some(c) => {
                // A = n·A·C/(n·C): the area's budget adds the concentration.
                let area = nac / (cell.n * c.value);
                area_m2 = Some(Estimate {
                    value: area,
                    std_error: area * slope_se / line.slope,
                    ci95: [
                        nac_from_slope(lo_s, d_known.value) / (cell.n * c.value),
                        nac_from_slope(hi_s, d_known.value) / (cell.n * c.value),
                    ],
                });
                budget(
                    "A",
                    "m²",
                    area,
                    vec![
                        (
                            slope_input.0,
                            slope_input.1,
                            slope_input.2,
                            slope_input.3,
                            area / line.slope,
                        ),
                        (
                            d_input.0,
                            d_input.1,
                            d_input.2,
                            d_input.3,
                            -area / (2.0 * d_known.value),
                        ),
                        ("concentration C", c.value, "mol/m³", c.u, -area / c.value),
                    ],
                )
            }
            None => budget(
                "n·A·C",
                "mol/m",
                nac,
                vec![
                    (
                        slope_input.0,
                        slope_input.1,
                        slope_input.2,
                        slope_input.3,
                        nac / line.slope,
                    ),
                    (
                        d_input.0,
                        d_input.1,
                        d_input.2,
                        d_input.3,
                        -nac / (2.0 * d_known.value),
                    ),
                ],
            ),
        });
    } else {
        mode = "forward";
        match (area, conc) {
            (Some(a_m), Some(c_m)) => {
                let d = diffusion_from_slope(line.slope, cell.n, a_m.value, c_m.value);
                let se = 2.0 * d * slope_se / line.slope.abs();
                let lo_s = (line.slope - t * slope_se).max(0.0);
                let hi_s = line.slope + t * slope_se;
                diffusion_m2_s = Some(Estimate {
                    value: d,
                    std_error: se,
                    ci95: [
                        diffusion_from_slope(lo_s, cell.n, a_m.value, c_m.value),
                        diffusion_from_slope(hi_s, cell.n, a_m.value, c_m.value),
                    ],
                });
                let mut inputs = vec![(
                    "Cottrell slope S",
                    line.slope,
                    "A·s^½",
                    slope_se,
                    2.0 * d / line.slope,
                )];
                inputs.push(("electrode area A", a_m.value, "m²", a_m.u, -2.0 * d / a_m.value));
                inputs.push(("concentration C", c_m.value, "mol/m³", c_m.u, -2.0 * d / c_m.value));
                result_budget = Some(budget("D", "m²/s", d, inputs));
                let d_cm2 = d / CM2_PER_S;
                if !(1e-7..=1e-4).contains(&d_cm2) {
                    warnings.push(warn(
                        WarningCode::UnusualD,
                        format!(
                            "D = {d_cm2:.3e} cm²/s lies outside 1×10⁻⁷…1×10⁻⁴ cm²/s, which is unusual for a species in solution; check the area, the concentration, n and the current unit"
                        ),
                    ));
                }
            }
            _ => warnings.push(warn(
                WarningCode::MissingInputs,
                "enter the electrode area (or radius) and the concentration to get D, or a known D to get n·A·C; only the slope was fitted".to_owned(),
            )),
        }
    }

    // Warnings about the window and the residuals.
    if let Some(ch) = &charging {
        let k_tau = wopt.k_tau * ch.tau_s;
        if lo.time_s < k_tau {
            warnings.push(warn(
                WarningCode::ChargingInWindow,
                format!(
                    "the window starts at {}, inside the charging region (k·τ = {} with τ = {}); the early points are biased high",
                    crate::fmt_s(lo.time_s),
                    crate::fmt_s(k_tau),
                    crate::fmt_s(ch.tau_s)
                ),
            ));
        }
    }
    if let Some(onset) = plateau.rises_from_s {
        let inside = hi.time_s > onset;
        warnings.push(warn(
            WarningCode::Convection,
            if inside {
                format!(
                    "natural convection detected from t = {}, and the window reaches past it to {}; the current there falls more slowly than t^-½",
                    crate::fmt_s(onset),
                    crate::fmt_s(hi.time_s)
                )
            } else {
                format!(
                    "natural convection detected from t = {}; the window ends before it",
                    crate::fmt_s(onset)
                )
            },
        ));
    }
    if let Some(onset) = plateau.falls_from_s {
        warnings.push(warn(
            WarningCode::FallsBelowPlateau,
            format!(
                "I·√t falls below its plateau from t = {}: the current decays faster than t^-½ (depletion of a thin layer, a finite volume or slow kinetics)",
                crate::fmt_s(onset)
            ),
        ));
    }
    if let (Some((t_edge, r)), Some(d)) = (
        edge,
        diffusion_m2_s.map(|e| e.value).or(known_d.map(|k| k.value)),
    ) {
        let share = (std::f64::consts::PI * d * hi.time_s).sqrt() / r;
        if hi.time_s >= t_edge * 0.999 || share >= wopt.edge_share_limit * 0.999 {
            warnings.push(warn(
                WarningCode::EdgeDiffusion,
                format!(
                    "edge diffusion is significant for this radius: √(πDt)/r reaches {:.0} % at {}; the fit stayed planar — the microdisk model accounts for the edge",
                    share * 100.0,
                    crate::fmt_s(hi.time_s)
                ),
            ));
        }
    }
    if points < 50 {
        warnings.push(warn(
            WarningCode::FewPoints,
            format!("only {points} points in the window; the uncertainty estimate is rough"),
        ));
    }
    if line.runs_z < -3.0 || line.lag1_autocorrelation > 0.5 {
        warnings.push(warn(
            WarningCode::StructuredResiduals,
            format!(
                "the residuals are structured (lag-1 autocorrelation {:.2}, runs-test z = {:.1}); the intervals were widened for it (×{:.2} on the slope's standard error), but check the window and the model",
                line.lag1_autocorrelation,
                line.runs_z,
                (line.covariance[0][0] / line.covariance_uncorrected[0][0]).sqrt()
            ),
        ));
    }
    let (w_time, w_current) = (&time[a..b], &current[a..b]);
    let (s_fit, b_fit, t0_fit) = (line.slope, line.intercept.unwrap_or(0.0), t0.value);
    let resid = move |i: usize| w_current[i] - s_fit / (w_time[i] - t0_fit).sqrt() - b_fit;
    // The model S·(t − t0)^-½ is monotone in t, so its change over [i, j] bounds every
    // neighbour difference inside.
    let variation = move |i: usize, j: usize| {
        (s_fit * (1.0 / (w_time[i] - t0_fit).sqrt() - 1.0 / (w_time[j] - t0_fit).sqrt())).abs()
    };
    let switches = range_switches(w_time, w_current, resid, variation);
    if !switches.is_empty() {
        warnings.push(warn(
            WarningCode::RangeSwitching,
            format!(
                "{} jump{} in the window look like current-range switching (first at {}); check the instrument's range settings",
                switches.len(),
                if switches.len() == 1 { "" } else { "s" },
                crate::fmt_s(switches[0])
            ),
        ));
    }

    let inflation = (line.covariance[0][0] / line.covariance_uncorrected[0][0]).sqrt();
    let diagnostics = Diagnostics {
        r2: line.r_squared,
        residual_sd_a: line.residual_sd,
        durbin_watson: line.durbin_watson,
        lag1_autocorrelation: line.lag1_autocorrelation,
        runs_z: line.runs_z,
        effective_points: line.effective_points,
        degrees_of_freedom: dof,
        se_inflation: inflation * t0_inflation.sqrt(),
        autocorrelation_method: format!(
            "sandwich covariance for white plus AR(1) noise, ρ(k) = c·φ^k with c = {:.2} and φ = {:.3} from the residuals' autocorrelation at lags 1–10; effective points n/(1 + 2cφ/(1 − φ)) = {:.0} for Student's t{}",
            line.noise.c,
            line.noise.phi,
            line.effective_points,
            if t0_refined {
                "; with t0 free, the covariance of S, b and t0 is the same sandwich on the three-parameter Jacobian"
            } else {
                ""
            }
        ),
        weighting: weighting.description(),
        regressor: if options.interval_average {
            "interval-averaged Cottrell current, 2(√t[i] − √t[i−1])/(t[i] − t[i−1])"
        } else {
            "I against t^-½ (Cottrell plot)"
        },
    };

    let sensitivity = options
        .sensitivity
        .then(|| window_sensitivity(time, current, a, b, t0.value, options, cell));

    Ok(PlanarResult {
        model: "planar-cottrell",
        equation: "I = n·F·A·C·√D / √(π·(t − t0)) + b",
        source: "F. G. Cottrell, Z. Phys. Chem. 42 (1903) 385",
        geometry: cell.geometry,
        mode,
        t0,
        t0_refined,
        window: WindowResult { lo, hi, points },
        charging,
        plateau,
        params,
        correlations,
        diffusion_m2_s,
        nac_mol_m,
        area_m2,
        budget: result_budget,
        diagnostics,
        background,
        range_switches_s: switches,
        sensitivity,
        warnings,
    })
}

fn correlation(cov: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let p = cov.len();
    (0..p)
        .map(|i| {
            (0..p)
                .map(|j| cov[i][j] / (cov[i][i] * cov[j][j]).sqrt())
                .collect()
        })
        .collect()
}

/// Fits t0 with the shifted Cottrell model (on at most 50 000 evenly strided points) and
/// returns it; the covariance is computed afterwards by [`onset_covariance`].
fn refine_onset(
    time: &[f64],
    current: &[f64],
    line: &LineFit,
    t0_start: f64,
    intercept: bool,
) -> Result<f64, String> {
    // Every one of the first 5 000 points, where the information on t0 sits (it falls as
    // (t − t0)^-3, so on a uniform grid the first hundred samples hold nearly all of it), then
    // a stride that keeps about 15 000 more to anchor S and b.
    let dense = time.len().min(5_000);
    let stride = ((time.len() - dense) / 15_000).max(1);
    let (t, y): (Vec<f64>, Vec<f64>) = (0..dense)
        .chain((dense..time.len()).step_by(stride))
        .map(|i| (time[i], current[i]))
        .unzip();
    let problem = ShiftedCottrell {
        time_s: &t,
        current_a: &y,
        intercept,
    };
    let mut p0 = vec![line.slope];
    if intercept {
        p0.push(line.intercept.unwrap_or(0.0));
    }
    p0.push(t0_start);
    let fit = solve(&problem, DVector::from_vec(p0), &SolveOptions::default()).map_err(|e| {
        format!("the step onset could not be refined ({e}); t0 was kept at the importer's value")
    })?;
    let t0 = fit.parameters[fit.parameters.len() - 1];
    if !(t0 < time[0]) {
        return Err(format!(
            "the refined step onset ({}) falls after the window's first sample; t0 was kept at the importer's value",
            crate::fmt_s(t0)
        ));
    }
    Ok(t0)
}

/// The covariance of (S, b, t0) — or (S, t0) without an intercept — for the shifted Cottrell
/// model at the fitted values, as a sandwich for the line's noise model, over every point of the
/// window. A strided Jacobian would stand each kept row for its stride and misstate the early
/// points, where t0's information sits and the rows change fastest; so the first
/// [`ONSET_DENSE`] rows are summed exactly, and the rest, where the rows vary slowly, in about
/// 20 000 blocks each summarised by its middle row. Over such a block the AR(1) sum
/// Σⱼ φ^|i−j| zⱼ is (1 + φ)/(1 − φ)·zᵢ to first order, and the dense part's recursion carries
/// into the first block.
fn onset_covariance(
    time: &[f64],
    line: &LineFit,
    t0: f64,
    intercept: bool,
) -> Option<nalgebra::DMatrix<f64>> {
    let (jtj, ar) = onset_sums(time, line.slope, t0, line.noise);
    let cols: &[usize] = if intercept { &[0, 1, 2] } else { &[0, 2] };
    let p = cols.len();
    let pick = |m: &[[f64; 3]; 3]| nalgebra::DMatrix::from_fn(p, p, |r, c| m[cols[r]][cols[c]]);
    let (jtj, ar) = (pick(&jtj), pick(&ar));
    let inv = jtj.clone().try_inverse()?;
    let c = line.noise.c;
    let middle = &jtj * (1.0 - c) + ar * c;
    Some(&inv * middle * &inv * line.residual_sd.powi(2))
}

/// Rows summed exactly by [`onset_covariance`] before it summarises by blocks.
const ONSET_DENSE: usize = 10_000;

/// Σ zzᵀ and Σᵢⱼ φ^|i−j| zᵢzⱼᵀ for the rows z = [(t−t0)^-½, 1, S/2·(t−t0)^-3/2].
fn onset_sums(
    time: &[f64],
    slope: f64,
    t0: f64,
    noise: NoiseModel,
) -> ([[f64; 3]; 3], [[f64; 3]; 3]) {
    let row = |i: usize| {
        let r = 1.0 / (time[i] - t0).sqrt();
        [r, 1.0, 0.5 * slope * r * r * r]
    };
    let phi = if noise.c > 0.0 { noise.phi } else { 0.0 };
    let n = time.len();
    let k = n.min(ONSET_DENSE);
    let mut jtj = [[0.0; 3]; 3];
    let mut ar = [[0.0; 3]; 3];
    let mut h = [0.0; 3];
    let mut prev = [0.0; 3];
    for i in 0..k {
        let z = row(i);
        if i > 0 {
            for c in 0..3 {
                h[c] = phi * (h[c] + prev[c]);
            }
        }
        for r in 0..3 {
            for c in 0..3 {
                jtj[r][c] += z[r] * z[c];
                ar[r][c] += z[r] * z[c] + z[r] * h[c] + h[r] * z[c];
            }
        }
        prev = z;
    }
    if k < n {
        // The dense part's recursion, h_k = Σ_{i<k} φ^(k−i) zᵢ, meets Σ_{j≥k} φ^(j−k) zⱼ ≈
        // z_k/(1 − φ).
        let zk = row(k);
        let hk: [f64; 3] = std::array::from_fn(|m| phi * (h[m] + prev[m]));
        for r in 0..3 {
            for c in 0..3 {
                ar[r][c] += (hk[r] * zk[c] + zk[r] * hk[c]) / (1.0 - phi);
            }
        }
        let smooth = (1.0 + phi) / (1.0 - phi);
        let stride = ((n - k) / 20_000).max(1);
        let mut b = k;
        while b < n {
            let e = (b + stride).min(n);
            let w = (e - b) as f64;
            let z = row(b + (e - b) / 2);
            for r in 0..3 {
                for c in 0..3 {
                    jtj[r][c] += w * z[r] * z[c];
                    ar[r][c] += w * smooth * z[r] * z[c];
                }
            }
            b = e;
        }
    }
    (jtj, ar)
}

/// D (or n·A·C, or the slope) as each bound moves, the other fixed: 12 log-spaced positions of
/// the lower bound from the first sample to a third of the upper bound, and 12 of the upper
/// bound from three times the lower bound to the end of the data.
fn window_sensitivity(
    time: &[f64],
    current: &[f64],
    a: usize,
    b: usize,
    t0: f64,
    options: &PlanarOptions,
    cell: &Cell,
) -> Sensitivity {
    let n = time.len();
    let stride = (n / 50_000).max(1);
    let area = cell.effective_area_m2();
    let (quantity, unit): (&'static str, &'static str) =
        match (cell.known_d_m2_s, area, cell.conc_mol_m3) {
            (Some(_), _, _) => ("nAC", "mol/m"),
            (None, Some(_), Some(_)) => ("D", "m²/s"),
            _ => ("slope", "A·s^½"),
        };
    let value = |s: f64, se: f64| -> (f64, f64) {
        match (cell.known_d_m2_s, area, cell.conc_mol_m3) {
            (Some(d), _, _) => {
                let v = nac_from_slope(s, d.value);
                (v, v * se / s)
            }
            (None, Some(a_m), Some(c_m)) => {
                let v = diffusion_from_slope(s, cell.n, a_m.value, c_m.value);
                (v, 2.0 * v * se / s.abs())
            }
            _ => (s, se),
        }
    };
    let fit_between = |lo_i: usize, hi_i: usize| -> Option<SensitivityPoint> {
        if hi_i <= lo_i + 10 {
            return None;
        }
        let idx: Vec<usize> = (lo_i..hi_i).step_by(stride).collect();
        let t: Vec<f64> = idx.iter().map(|&i| time[i]).collect();
        let y: Vec<f64> = idx.iter().map(|&i| current[i]).collect();
        let win = Window {
            time_s: &t,
            current_a: &y,
            t_before_s: None,
            t_after_s: None,
            t0_s: t0,
        };
        let line = fit_line(
            &win,
            Regressor::InverseSqrt,
            Weighting::Ordinary,
            options.intercept,
        )
        .ok()?;
        let (v, se) = value(line.slope, line.slope_std_error());
        Some(SensitivityPoint {
            bound_s: time[lo_i].max(0.0),
            value: v,
            std_error: se,
            points: hi_i - lo_i,
        })
    };
    let log_grid = |from: f64, to: f64| -> Vec<f64> {
        if !(to > from && from > 0.0) {
            return Vec::new();
        }
        (0..12)
            .map(|k| (from.ln() + (to.ln() - from.ln()) * k as f64 / 11.0).exp())
            .collect()
    };
    let t_lo = time[a];
    let t_hi = time[b - 1];
    let lower = log_grid(time[0].max(t0 + 1e-12), t_hi / 3.0)
        .into_iter()
        .filter_map(|lo| {
            let i = time.partition_point(|&t| t < lo);
            fit_between(i, b)
        })
        .collect();
    let upper = log_grid(3.0 * t_lo, time[n - 1])
        .into_iter()
        .filter_map(|hi| {
            let j = time.partition_point(|&t| t <= hi);
            fit_between(a, j).map(|mut p| {
                p.bound_s = hi;
                p
            })
        })
        .collect();
    Sensitivity {
        quantity,
        unit,
        lower,
        upper,
        note: format!(
            "ordinary least squares of I on (t − t0)^-½{} with t0 held at the fitted value{}; standard errors without the autocorrelation correction",
            if options.intercept {
                " with an intercept"
            } else {
                ""
            },
            if stride > 1 {
                format!(", on every {stride}th point")
            } else {
                String::new()
            }
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn block_summed_onset_sums_match_the_exact_sandwich() {
        // 2 000 000 rows at 1 µs from 1 µs on, white plus AR(1) noise: the blocks past the
        // dense part agree with the exact streamed sums to 0.1 %.
        let time: Vec<f64> = (1..=2_000_000).map(|k| f64::from(k) * 1e-6).collect();
        let noise = NoiseModel { c: 0.6, phi: 0.9 };
        let (slope, t0) = (1e-5, 2e-8);
        let (jtj, ar) = onset_sums(&time, slope, t0, noise);
        let row = |i: usize| {
            let r = 1.0 / (time[i] - t0).sqrt();
            [r, 1.0, 0.5 * slope * r * r * r]
        };
        let exact =
            crate::regression::streamed_sandwich::<3>(time.len(), row, 1.0, noise).expect("exact");
        let to = |m: &[[f64; 3]; 3]| nalgebra::DMatrix::from_fn(3, 3, |r, c| m[r][c]);
        let (jtj, ar) = (to(&jtj), to(&ar));
        let inv = jtj.clone().try_inverse().expect("inverse");
        let approx = &inv * (&jtj * (1.0 - noise.c) + ar * noise.c) * &inv;
        for r in 0..3 {
            let rel = (approx[(r, r)] - exact[(r, r)]).abs() / exact[(r, r)];
            assert!(
                rel < 1e-3,
                "variance {r}: {} vs {}",
                approx[(r, r)],
                exact[(r, r)]
            );
        }
    }
}
