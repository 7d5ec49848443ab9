//! One entry for every model: [`analyze_model`] fits the chosen [`ModelKind`] to a step of a
//! trace over a window and returns one [`ModelResult`], the type the command line, the report
//! and the desktop window all show.
//!
//! The window is the planar analysis's automatic one ([`crate::planar::analyze`]) unless the
//! user gives both bounds: all of it (with its refined onset t0) for Anson and the double step;
//! only its lower bound (the charging rules), no earlier than 50 sampling intervals and at the
//! importer's onset, for the disk, sphere, kinetic and slab models, whose currents depart from a
//! Cottrell plateau by their own physics (see `window_for`). The Cottrell choice is the planar analysis
//! itself, whose richer [`PlanarResult`] the result carries.
//!
//! Times are seconds after the step (the importer's onset); currents have the faradaic sign
//! made positive, with the background of [`PlanarOptions::background`] subtracted.

use diffusor_trace::{Segment, SegmentKind, Trace};
use serde::Serialize;

use crate::cell::{Cell, Geometry, Measured};
use crate::geometry::{ChoiceInput, ModelChoice as Recommendation, recommend_model};
use crate::models::anson::{
    AnsonFit, DoubleLayerCharge, fit_anson, fit_anson_from_current, integrate_charge_c,
};
use crate::models::charging::{ChargingFit, fit_cottrell_charging};
use crate::models::common::{Known, ModelError, ModelFit, Transient, estimate};
use crate::models::double_step::{DoubleStepFit, fit_double_step};
use crate::models::kinetics::{
    BackReaction, KineticCell, KineticsFit, fit_kinetics, kinetic_current_a,
};
use crate::models::microdisk::{DiskExpression, MicrodiskFit, fit_microdisk, microdisk_current_a};
use crate::models::planar::diffusion_from_slope;
use crate::models::slab::{SlabFit, fit_slab, slab_current_a};
use crate::models::sphere::{SphereFit, SphereKind, fit_sphere, sphere_current_a};
use crate::planar::{
    AnalysisError, Background, Estimate, Param, PlanarOptions, PlanarResult, WindowResult, analyze,
};
use crate::solver::Termination;
use crate::window::{Bound, BoundChoice, BoundReason};

/// The models the user can choose, by the names the command line takes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum ModelKind {
    /// Planar semi-infinite diffusion: the Cottrell analysis ([`crate::planar`]).
    #[default]
    Cottrell,
    /// Cottrell plus the double-layer charging decay, fitted on every point from the first
    /// sample ([`crate::models::charging`]).
    CottrellCharging,
    /// An inlaid disk of known radius ([`crate::models::microdisk`]); the expression is
    /// [`ModelInputs::disk_expression`].
    Microdisk,
    /// A sphere, or a hemisphere when the geometry says so ([`crate::models::sphere`]).
    Sphere,
    /// Finite electron-transfer kinetics at a planar electrode ([`crate::models::kinetics`]).
    Kinetic,
    /// Chronocoulometry, the Anson plot ([`crate::models::anson`]).
    Anson,
    /// A double potential step ([`crate::models::double_step`]).
    DoubleStep,
    /// A finite slab with one face blocked ([`crate::models::slab`]).
    Slab,
}

impl ModelKind {
    /// Every choice, in the order the command line lists them.
    pub const ALL: [ModelKind; 8] = [
        ModelKind::Cottrell,
        ModelKind::CottrellCharging,
        ModelKind::Microdisk,
        ModelKind::Sphere,
        ModelKind::Kinetic,
        ModelKind::Anson,
        ModelKind::DoubleStep,
        ModelKind::Slab,
    ];

    /// The name the command line takes.
    pub fn name(self) -> &'static str {
        match self {
            ModelKind::Cottrell => "cottrell",
            ModelKind::CottrellCharging => "cottrell-charging",
            ModelKind::Microdisk => "microdisk",
            ModelKind::Sphere => "sphere",
            ModelKind::Kinetic => "kinetic",
            ModelKind::Anson => "anson",
            ModelKind::DoubleStep => "double-step",
            ModelKind::Slab => "slab",
        }
    }

    /// The choice named `name` (as [`ModelKind::name`] spells it).
    pub fn from_name(name: &str) -> Option<ModelKind> {
        ModelKind::ALL.into_iter().find(|m| m.name() == name)
    }

    /// The default for a geometry: planar → Cottrell, microdisk → the disk model, sphere and
    /// hemisphere → the sphere model.
    pub fn default_for(geometry: Geometry) -> ModelKind {
        match geometry {
            Geometry::Planar => ModelKind::Cottrell,
            Geometry::Microdisk => ModelKind::Microdisk,
            Geometry::Sphere | Geometry::Hemisphere => ModelKind::Sphere,
        }
    }
}

/// What some models need besides the cell.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct ModelInputs {
    /// Which disk expression the microdisk model uses.
    pub disk_expression: DiskExpression,
    /// The back reaction at the stepped potential, which the kinetic model needs.
    pub back_reaction: Option<BackReaction>,
    /// Film thickness L in m, which the slab model needs.
    pub thickness_m: Option<f64>,
    /// The step height ΔE in V for the charging model's Ru and Cdl; taken from the trace's
    /// potential column when not given.
    pub step_v: Option<f64>,
    /// The double-layer charge Q_dl in C (with its standard uncertainty) for the adsorbed
    /// amount of the Anson and double-step models.
    pub double_layer_charge_c: Option<Measured>,
}

/// How the model was chosen.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChoiceNote {
    /// Whether it is the default for the geometry (no model was asked for).
    pub by_default: bool,
    /// What [`recommend_model`] recommends for this electrode and window, when it could judge.
    pub recommended: Option<Recommendation>,
    /// Why, in plain language.
    pub reason: String,
}

impl ChoiceNote {
    /// The model the geometry check recommends, as a choice the user can make, when it could
    /// judge.
    pub fn recommended_model(&self) -> Option<ModelKind> {
        self.recommended.as_ref().map(recommended_choice)
    }
}

/// The model-specific part of a result.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
#[allow(clippy::large_enum_variant)] // One per run; boxing would only add indirection.
pub enum ModelDetails {
    /// The planar analysis.
    Planar(PlanarResult),
    /// Cottrell plus charging.
    Charging(ChargingFit),
    /// The inlaid disk, with its cross-checks.
    Microdisk(MicrodiskFit),
    /// Sphere or hemisphere, with the closed-form line.
    Sphere(SphereFit),
    /// Finite kinetics.
    Kinetic(KineticsFit),
    /// Chronocoulometry.
    Anson(AnsonFit),
    /// Double step.
    DoubleStep(DoubleStepFit),
    /// Finite slab.
    Slab(SlabFit),
}

/// The fitted curve, kept to evaluate the model anywhere in the window.
#[derive(Debug, Clone, PartialEq)]
enum Curve {
    Planar,
    Charging {
        s: f64,
        b: f64,
        amplitude_a: f64,
        tau_s: f64,
    },
    Disk {
        nc: f64,
        radius_m: f64,
        d: f64,
        expression: DiskExpression,
    },
    Sphere {
        nc: f64,
        radius_m: f64,
        d: f64,
        kind: SphereKind,
    },
    Kinetic {
        cell: KineticCell,
        kf: f64,
        d: f64,
    },
    Anson {
        slope: f64,
    },
    DoubleStep {
        forward: [f64; 2],
        reverse: [f64; 2],
        tau_s: f64,
    },
    Slab {
        area_m2: f64,
        nc: f64,
        d: f64,
        thickness_m: f64,
    },
}

/// The result of any model, in one shape.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelResult {
    /// The model as chosen.
    pub model: ModelKind,
    /// The fitted variant's identifier (as `microdisk_mahon_oldham`, `planar-cottrell`).
    pub variant: &'static str,
    /// How the model was chosen, with the geometry helper's recommendation.
    pub choice: ChoiceNote,
    /// The equation fitted.
    pub equation: &'static str,
    /// Its published source.
    pub source: &'static str,
    /// Where the equation holds.
    pub validity: &'static str,
    /// Whether the data lie in that range (judged with the fitted parameters).
    pub in_validity_range: bool,
    /// How the validity was judged, with the numbers.
    pub validity_check: String,
    /// The electrode geometry entered.
    pub geometry: Geometry,
    /// `forward` (D from the fit) or `inverse` (n·A·C from a known D; Cottrell only).
    pub mode: &'static str,
    /// The window with the reason for each bound (times after the importer's onset, s).
    pub window: WindowResult,
    /// The step onset the model's times start from, relative to the importer's, in s: the
    /// planar analysis's refined t0 (0 when it was not refined).
    pub t0_s: f64,
    /// Background subtracted, in words.
    pub background: String,
    /// Diffusion coefficient in m²/s, when the model gives one.
    pub diffusion_m2_s: Option<Estimate>,
    /// Bulk concentration in mol/m³ (the step of the surface concentration for the slab), when
    /// the model determines it.
    pub conc_mol_m3: Option<Estimate>,
    /// n·A·C in mol/m (Cottrell's inverse mode).
    pub nac_mol_m: Option<Estimate>,
    /// Electroactive area in m² (Cottrell's inverse mode, with C given).
    pub area_m2: Option<Estimate>,
    /// Fitted and derived parameters with standard errors and 95 % intervals (SI units as
    /// each states).
    pub params: Vec<Param>,
    /// Correlation matrix of the fitted parameters, in the order of the first entries of
    /// `params`.
    pub correlations: Vec<Vec<f64>>,
    /// What was fitted: `current` (A) or `charge` (C, the Anson plot).
    pub fitted_quantity: &'static str,
    /// Points in the fit (count).
    pub points: usize,
    /// Residual standard deviation in the fitted quantity's unit (A or C).
    pub residual_sd: f64,
    /// Coefficient of determination of the fitted quantity over the window (dimensionless).
    pub r2: f64,
    /// Solver iterations (count; 0 for closed-form lines).
    pub iterations: u64,
    /// Whether a convergence test stopped the solver (true for closed-form lines).
    pub converged: bool,
    /// Which test stopped it, for an iterative fit.
    pub termination: Option<Termination>,
    /// Degrees of freedom for Student's t.
    pub degrees_of_freedom: f64,
    /// Warnings in plain language.
    pub warnings: Vec<String>,
    /// The model's own result, with everything it reports.
    pub details: ModelDetails,
    #[serde(skip)]
    curve: Curve,
}

impl ModelResult {
    /// The planar analysis, when the model is Cottrell's.
    pub fn planar(&self) -> Option<&PlanarResult> {
        match &self.details {
            ModelDetails::Planar(p) => Some(p),
            _ => None,
        }
    }

    /// The fitted current at `t_s` seconds after the step, in A with the faradaic sign
    /// positive (for the Anson model the current its charge line implies, `m/(2√t)`; for the
    /// double step the forward current up to τ and the reverse current after it, negative);
    /// NaN where the model is not defined.
    pub fn predict_a(&self, t_s: f64) -> f64 {
        if let Curve::Planar = self.curve {
            return self.planar().map_or(f64::NAN, |p| p.predict_a(t_s));
        }
        let t_s = t_s - self.t0_s;
        if !(t_s > 0.0) {
            return f64::NAN;
        }
        match &self.curve {
            Curve::Planar => f64::NAN,
            Curve::Charging {
                s,
                b,
                amplitude_a,
                tau_s,
            } => s / t_s.sqrt() + b + amplitude_a * (-t_s / tau_s).exp(),
            Curve::Disk {
                nc,
                radius_m,
                d,
                expression,
            } => microdisk_current_a(1.0, *radius_m, *nc, *d, t_s, *expression),
            Curve::Sphere {
                nc,
                radius_m,
                d,
                kind,
            } => sphere_current_a(1.0, *kind, *radius_m, *nc, *d, t_s),
            Curve::Kinetic { cell, kf, d } => kinetic_current_a(
                cell.n,
                cell.area_m2,
                cell.conc_mol_m3,
                *kf,
                *d,
                cell.back,
                t_s,
            ),
            Curve::Anson { slope } => slope / (2.0 * t_s.sqrt()),
            Curve::DoubleStep {
                forward,
                reverse,
                tau_s,
            } => {
                if t_s <= *tau_s {
                    forward[0] / t_s.sqrt() + forward[1]
                } else {
                    let tp = t_s - tau_s;
                    -(reverse[0] * (1.0 / tp.sqrt() - 1.0 / t_s.sqrt()) + reverse[1])
                }
            }
            Curve::Slab {
                area_m2,
                nc,
                d,
                thickness_m,
            } => slab_current_a(1.0, *area_m2, *nc, *d, *thickness_m, t_s),
        }
    }

    /// The fitted current at `points` times spread evenly in log-time over the window, as
    /// `(t in s, I in A)`: enough to draw the curve on a plot.
    pub fn curve(&self, points: usize) -> Vec<(f64, f64)> {
        let (lo, hi) = (self.window.lo.time_s, self.window.hi.time_s);
        if !(lo > 0.0 && hi > lo) || points < 2 {
            return Vec::new();
        }
        let (a, b) = (lo.ln(), hi.ln());
        (0..points)
            .map(|k| {
                let t = (a + (b - a) * k as f64 / (points - 1) as f64).exp();
                (t, self.predict_a(t))
            })
            .collect()
    }
}

/// The step's data: times after the step (positive ones only), the current with the faradaic
/// sign positive and the background subtracted, and the background in words.
struct Prepared {
    time_s: Vec<f64>,
    current_a: Vec<f64>,
    /// Index into the trace of the first sample kept.
    first: usize,
    background: String,
}

fn interpolate(time_s: &[f64], current_a: &[f64], t: f64) -> Option<f64> {
    let k = time_s.partition_point(|&x| x < t);
    if k == 0 {
        return (time_s.first() == Some(&t)).then(|| current_a[0]);
    }
    if k >= time_s.len() {
        return None;
    }
    let (t0, t1) = (time_s[k - 1], time_s[k]);
    Some(current_a[k - 1] + (t - t0) / (t1 - t0) * (current_a[k] - current_a[k - 1]))
}

/// The sign that makes a segment's faradaic current positive.
fn sign_of(trace: &Trace, segment: &Segment) -> f64 {
    segment
        .polarity
        .or(trace.polarity)
        .map_or(1.0, diffusor_trace::Polarity::factor)
}

/// Prepares a segment as the planar analysis does, with the sign `sign` (the forward step's
/// for a double step's reverse segment).
fn prepare(
    trace: &Trace,
    segment: &Segment,
    sign: f64,
    background: &Background,
) -> Result<Prepared, ModelError> {
    let all_t = &trace.time_s[segment.start..segment.end];
    let skip = all_t.partition_point(|&t| t - segment.start_time_s <= 0.0);
    let time_s: Vec<f64> = all_t[skip..]
        .iter()
        .map(|t| t - segment.start_time_s)
        .collect();
    let raw = &trace.current_a[segment.start + skip..segment.end];
    let (text, current_a) = match background {
        Background::None => ("none".to_owned(), raw.iter().map(|c| c * sign).collect()),
        Background::Baseline => match &trace.baseline {
            Some(b) => (
                format!(
                    "pre-step baseline mean {} subtracted",
                    diffusor_trace::format_si(b.mean_a, "A", 3)
                ),
                raw.iter().map(|c| (c - b.mean_a) * sign).collect(),
            ),
            None => (
                "none (no baseline in the trace)".to_owned(),
                raw.iter().map(|c| c * sign).collect(),
            ),
        },
        Background::Constant { current_a } => (
            format!(
                "constant {} subtracted",
                diffusor_trace::format_si(*current_a, "A", 3)
            ),
            raw.iter().map(|c| (c - current_a) * sign).collect(),
        ),
        Background::Blank {
            time_s: bt,
            current_a: bc,
        } => {
            let mut out = Vec::with_capacity(raw.len());
            for (t, c) in time_s.iter().zip(raw) {
                let b = interpolate(bt, bc, *t).ok_or(ModelError::InvalidInput {
                    what: "blank",
                    requirement: "a trace that covers the whole fitted range",
                    value: *t,
                })?;
                out.push((c - b) * sign);
            }
            ("blank trace subtracted (interpolated)".to_owned(), out)
        }
    };
    Ok(Prepared {
        time_s,
        current_a,
        first: segment.start + skip,
        background: text,
    })
}

/// Moves the time origin to the refined onset `t0_s` (relative to the importer's) and drops the
/// samples that are then not after it.
fn shift_onset(p: &mut Prepared, t0_s: f64) {
    if t0_s == 0.0 {
        return;
    }
    for t in &mut p.time_s {
        *t -= t0_s;
    }
    let skip = p.time_s.partition_point(|&t| t <= 0.0);
    p.time_s.drain(..skip);
    p.current_a.drain(..skip);
    p.first += skip;
}

/// The window (and the planar analysis's refined onset, 0 when not refined): the user's
/// bounds when both are given, else the planar analysis's rules.
///
/// The planar models (Cottrell plus charging, Anson, double step) take the whole automatic
/// window: charging, convection and edge rules. The others take only its lower bound (the
/// charging rules): the upper-bound rules judge I·√t against a Cottrell plateau, from which
/// a disk, a sphere, slow kinetics or a thin film depart by their own physics, so they would
/// cut the very part of the transient that determines the model. Their automatic upper bound
/// is the end of the data.
fn window_for(
    model: ModelKind,
    trace: &Trace,
    segment: &Segment,
    cell: &Cell,
    options: &PlanarOptions,
    time_s: &[f64],
) -> Result<(WindowResult, f64), ModelError> {
    let count = |lo: f64, hi: f64| {
        time_s.partition_point(|&t| t <= hi) - time_s.partition_point(|&t| t < lo)
    };
    let given = |lo: f64, hi: f64| WindowResult {
        lo: Bound::new(lo, false, BoundReason::Given),
        hi: Bound::new(hi, false, BoundReason::Given),
        points: count(lo, hi),
    };
    let planar_model = matches!(
        model,
        ModelKind::CottrellCharging | ModelKind::Anson | ModelKind::DoubleStep
    );
    let last = time_s.last().copied().unwrap_or(0.0);
    let mut quick = PlanarOptions {
        sensitivity: false,
        ..options.clone()
    };
    let end_of_data = !planar_model && quick.window.hi == BoundChoice::Auto;
    if end_of_data {
        quick.window.hi = BoundChoice::At(last);
    }
    let planar = analyze(trace, segment, cell, &quick);
    let (mut window, t0) = match (planar, options.window.lo, options.window.hi) {
        (Ok(r), _, _) => {
            let t0 = if r.t0_refined { r.t0.value } else { 0.0 };
            (r.window, t0)
        }
        // Both bounds given: the planar analysis was only wanted for the onset.
        (Err(_), BoundChoice::At(lo), BoundChoice::At(hi)) => return Ok((given(lo, hi), 0.0)),
        (Err(e), _, _) => return Err(ModelError::Window(e)),
    };
    if let (BoundChoice::At(lo), BoundChoice::At(hi)) = (options.window.lo, options.window.hi) {
        return Ok((given(lo, hi), t0));
    }
    // Only the planar models share the planar fit's refined onset: for the others its
    // shifted-Cottrell form is not the current's, and t0 comes out wrong (measured on the
    // microdisk demo: −0.32 ms against the true −0.5 ms, and +3.1 ms from a later window).
    // Their times start at the importer's onset, which is known to half a sampling interval Δt;
    // such an error changes a t^-½ current by Δt/(4t), so their automatic window starts no
    // earlier than 50·Δt, where that is below 0.5 % (a convention of this program).
    // Nor is it valid for the charging model, which fits from the first sample where the
    // onset refinement (made after charging) does not look: measured on a synthetic transient,
    // it moved t0 by a sample and the charging fit lost D entirely. That model fits its own
    // onset instead (`fit_cottrell_charging`).
    let t0 = if matches!(model, ModelKind::Anson | ModelKind::DoubleStep) {
        t0
    } else {
        0.0
    };
    let dt = trace.sampling_interval_s();
    if !planar_model
        && options.window.lo == BoundChoice::Auto
        && dt.is_finite()
        && 50.0 * dt > window.lo.time_s
    {
        let lo = 50.0 * dt;
        let charging_lo = window.lo.time_s;
        window.lo = Bound::new(lo, true, BoundReason::FirstSample);
        window.lo.description = format!(
            "50 sampling intervals after the step: the onset is known to half an interval ({}), which would change the current by up to 0.5 % before this; the charging rules set {}",
            crate::fmt_s(dt / 2.0),
            crate::fmt_s(charging_lo)
        );
    }
    if end_of_data {
        window.hi = Bound::new(last, true, BoundReason::EndOfData);
        window.hi.description = format!(
            "the end of the data (the planar convection and edge rules do not apply to the {} model; look at the residuals for a late departure)",
            model.name()
        );
    }
    window.points = count(window.lo.time_s, window.hi.time_s);
    Ok((window, t0))
}

fn missing(model: ModelKind, input: &'static str) -> ModelError {
    ModelError::MissingInput {
        model: model.name(),
        input,
    }
}

/// The coefficient of determination of `y` against `fitted`.
fn r_squared(y: &[f64], fitted: impl Fn(usize) -> f64) -> f64 {
    let n = y.len().max(1) as f64;
    let mean = y.iter().sum::<f64>() / n;
    let tss: f64 = y.iter().map(|v| (v - mean).powi(2)).sum();
    let rss: f64 = y
        .iter()
        .enumerate()
        .map(|(i, v)| (v - fitted(i)).powi(2))
        .sum();
    if tss > 0.0 { 1.0 - rss / tss } else { f64::NAN }
}

/// The parts every [`ModelFit`] shares, copied into a result.
fn from_model_fit(
    fit: &ModelFit,
    common: Common,
    details: ModelDetails,
    curve: Curve,
) -> ModelResult {
    let mut warnings = common.warnings;
    warnings.extend(fit.warnings.iter().map(|w| w.message.clone()));
    ModelResult {
        model: common.model,
        variant: fit.model,
        choice: common.choice,
        equation: fit.equation,
        source: fit.source,
        validity: fit.validity,
        in_validity_range: fit.in_validity_range,
        validity_check: fit.validity_check.clone(),
        geometry: common.geometry,
        mode: "forward",
        window: common.window,
        t0_s: common.t0_s,
        background: common.background,
        diffusion_m2_s: fit.diffusion_m2_s,
        conc_mol_m3: fit
            .params
            .iter()
            .find(|p| p.symbol == "C" || p.symbol == "ΔC")
            .map(|p| p.estimate),
        nac_mol_m: None,
        area_m2: None,
        params: fit.params.clone(),
        correlations: fit.correlations.clone(),
        fitted_quantity: "current",
        points: fit.points,
        residual_sd: fit.residual_sd,
        r2: f64::NAN,
        iterations: fit.iterations,
        converged: fit.converged,
        termination: Some(fit.termination),
        degrees_of_freedom: fit.degrees_of_freedom,
        warnings,
        details,
        curve,
    }
}

/// What every non-planar result takes from the dispatch.
struct Common {
    model: ModelKind,
    t0_s: f64,
    choice: ChoiceNote,
    geometry: Geometry,
    window: WindowResult,
    background: String,
    warnings: Vec<String>,
}

/// The geometry helper's view of the electrode and window, with `rough_d` (m²/s) as the
/// order of magnitude of D.
fn recommendation(
    cell: &Cell,
    inputs: &ModelInputs,
    window: &WindowResult,
    rough_d: f64,
) -> Option<Recommendation> {
    let lo = if window.lo.time_s > 0.0 {
        window.lo.time_s
    } else {
        window.hi.time_s * 1e-6
    };
    recommend_model(&ChoiceInput {
        geometry: cell.geometry,
        radius_m: cell.disk_radius_m(),
        thickness_m: inputs.thickness_m,
        window_s: [lo, window.hi.time_s],
        rough_d_m2_s: rough_d,
    })
    .ok()
}

/// The name of the model the helper recommends, as the command line spells it.
fn recommended_choice(r: &Recommendation) -> ModelKind {
    use crate::geometry::RecommendedModel as R;
    match r.model {
        R::Planar => ModelKind::Cottrell,
        R::Disk => ModelKind::Microdisk,
        R::Sphere | R::Hemisphere => ModelKind::Sphere,
        R::FiniteSlab => ModelKind::Slab,
    }
}

/// A typical D of a small molecule in water, 10⁻⁹ m²/s, as the order of magnitude the geometry
/// helper needs when nothing better is known (a handbook order of magnitude, from memory).
const TYPICAL_D_M2_S: f64 = 1e-9;

fn choice_note(
    model: ModelKind,
    by_default: bool,
    cell: &Cell,
    inputs: &ModelInputs,
    window: &WindowResult,
    rough_d: Option<f64>,
    warnings: &mut Vec<String>,
) -> ChoiceNote {
    let d = rough_d
        .filter(|d| *d > 0.0 && d.is_finite())
        .or(cell.known_d_m2_s.map(|d| d.value))
        .unwrap_or(TYPICAL_D_M2_S);
    let rec = recommendation(cell, inputs, window, d);
    let how = if by_default {
        format!(
            "the default for a {} electrode (no model asked for)",
            cell.geometry.name()
        )
    } else {
        "asked for".to_owned()
    };
    let reason = match &rec {
        Some(r) => format!("{how}; the geometry check says: {}", r.reason),
        None => how,
    };
    if let Some(r) = &rec {
        let suggested = recommended_choice(r);
        // The planar analysis already warns about the edge, and the slab is only recommended
        // when a thickness was given for it.
        if suggested != model && model != ModelKind::Cottrell && suggested != ModelKind::Slab {
            warnings.push(format!(
                "the geometry check recommends the {} model here rather than {}: {}",
                suggested.name(),
                model.name(),
                r.reason
            ));
        }
    }
    ChoiceNote {
        by_default,
        recommended: rec,
        reason,
    }
}

/// D from a forward Cottrell slope `S = n·F·A·C·√(D/π)` with n, A and C known, with its
/// standard error (`u(D)/D = 2·u(S)/S`) and interval.
fn d_from_slope(slope: &Estimate, n: f64, area: f64, conc: f64, dof: f64) -> Estimate {
    let d = diffusion_from_slope(slope.value, n, area, conc);
    estimate(d, 2.0 * d * slope.std_error / slope.value, dof)
}

/// Above this |correlation| between D and C (a variance inflation 1/(1 − r²) of 1000), a disk
/// fit warns that D alone is poorly fixed. Our own threshold: a 5 µm disk sampled every 1 ms
/// from 50 ms on gave r = −0.99990 (and on the demo microdisk the two disk expressions, 0.6 %
/// apart, gave D 3 % apart), while sampled every 0.1 ms from 5 ms on it gave r = −0.99909.
const DISK_CORRELATION_LIMIT: f64 = 0.9995;

/// Fits `model` (the geometry's default when `None`) to the step `segment` of `trace` over the
/// window of `options` (automatic unless both bounds are given), with the cell and the
/// model's extra inputs.
///
/// # Errors
///
/// [`ModelError::MissingInput`] when the model needs something the cell or `inputs` lack
/// (named in the message), [`ModelError::Analysis`] when the Cottrell analysis fails,
/// [`ModelError::Window`] when the automatic window cannot be set, and the model's own
/// errors.
pub fn analyze_model(
    trace: &Trace,
    segment: &Segment,
    cell: &Cell,
    options: &PlanarOptions,
    model: Option<ModelKind>,
    inputs: &ModelInputs,
) -> Result<ModelResult, ModelError> {
    cell.validate()
        .map_err(|e| ModelError::Analysis(AnalysisError::Cell(e)))?;
    let by_default = model.is_none();
    let model = model.unwrap_or(ModelKind::default_for(cell.geometry));
    let area = cell.effective_area_m2();
    let conc = cell.conc_mol_m3;

    if model == ModelKind::Cottrell {
        return cottrell(trace, segment, cell, options, inputs, by_default);
    }

    // Everything a model needs is checked before any work is done.
    let radius = || -> Option<f64> {
        cell.radius_m.map(|r| r.value).or_else(|| {
            let a = cell.area_m2?.value;
            let factor = match (model, cell.geometry) {
                (ModelKind::Sphere, Geometry::Hemisphere) => 2.0,
                (ModelKind::Sphere, _) => 4.0,
                _ => 1.0,
            };
            Some((a / (factor * std::f64::consts::PI)).sqrt())
        })
    };
    let need_nac = || -> Result<(f64, f64), ModelError> {
        let a = area.ok_or(missing(model, "the electrode area (or radius)"))?;
        let c = conc.ok_or(missing(model, "the bulk concentration"))?;
        Ok((a.value, c.value))
    };
    match model {
        ModelKind::Microdisk => {
            radius().ok_or(missing(model, "the disk radius"))?;
        }
        ModelKind::Sphere => {
            radius().ok_or(missing(model, "the sphere radius"))?;
        }
        ModelKind::Kinetic => {
            need_nac()?;
            inputs.back_reaction.ok_or(missing(
                model,
                "the back reaction at the stepped potential (irreversible, or kb/kf)",
            ))?;
        }
        ModelKind::Anson => {
            need_nac()?;
        }
        ModelKind::Slab => {
            area.ok_or(missing(model, "the electrode area"))?;
            inputs
                .thickness_m
                .ok_or(missing(model, "the film thickness L"))?;
        }
        ModelKind::DoubleStep => {
            reverse_segment(trace, segment).ok_or(missing(
                model,
                "a reverse step in the trace (this trace has no step after the one analysed)",
            ))?;
        }
        ModelKind::Cottrell | ModelKind::CottrellCharging => {}
    }

    let sign = sign_of(trace, segment);
    let mut prepared = prepare(trace, segment, sign, &options.background)?;
    let (mut window, t0) = window_for(model, trace, segment, cell, options, &prepared.time_s)?;
    // The importer puts the onset midway between two samples; for the planar models the
    // planar analysis refines it (t0) and their times start there, as the Cottrell fit's do:
    // half a sample is a large error at the first points of a fast transient.
    shift_onset(&mut prepared, t0);
    let mut warnings = Vec::new();
    if cell.known_d_m2_s.is_some() {
        warnings.push(format!(
            "the known D entered is not used: the {} model determines D itself",
            model.name()
        ));
    }
    let all = Transient {
        time_s: &prepared.time_s,
        current_a: &prepared.current_a,
    };
    if model == ModelKind::CottrellCharging && options.window.lo == BoundChoice::Auto {
        // This model fits the charging decay, so it starts at the first sample.
        window.lo = Bound::new(prepared.time_s[0] + t0, true, BoundReason::FirstSample);
        window.lo.description =
            "the first sample after the step (the model fits the charging current itself)"
                .to_owned();
    }
    let data = all.window(window.lo.time_s - t0, window.hi.time_s - t0);
    window.points = data.len();
    let n = cell.n;
    let known = Known::Electrons(n);
    let make_common = |choice: ChoiceNote, window: WindowResult, warnings: Vec<String>| Common {
        model,
        t0_s: t0,
        choice,
        geometry: cell.geometry,
        window,
        background: prepared.background.clone(),
        warnings,
    };

    let mut result = match model {
        ModelKind::CottrellCharging => {
            let nac = match (area, conc) {
                (Some(a), Some(c)) => Some((n, a.value, c.value)),
                _ => None,
            };
            let step_v = inputs.step_v.or_else(|| step_height(trace, segment));
            let fit = fit_cottrell_charging(&data, nac, step_v)?;
            let p = |s: &str| {
                fit.fit
                    .params
                    .iter()
                    .find(|p| p.symbol == s)
                    .map_or(f64::NAN, |p| p.estimate.value)
            };
            let curve = Curve::Charging {
                s: p("S"),
                b: p("b"),
                amplitude_a: fit.charging_amplitude_a.value,
                tau_s: fit.time_constant_s.value,
            };
            let choice = choice_note(
                model,
                by_default,
                cell,
                inputs,
                &window,
                fit.fit.diffusion_m2_s.map(|d| d.value),
                &mut warnings,
            );
            // The model fits its own onset; the curve is evaluated from there.
            let common = Common {
                t0_s: t0 + fit.onset_s.value,
                ..make_common(choice, window, warnings)
            };
            from_model_fit(&fit.fit.clone(), common, ModelDetails::Charging(fit), curve)
        }
        ModelKind::Microdisk => {
            let r = radius().ok_or(missing(model, "the disk radius"))?;
            let fit = fit_microdisk(&data, r, known, inputs.disk_expression)?;
            let curve = Curve::Disk {
                nc: fit.fit.params[1].estimate.value,
                radius_m: r,
                d: fit.fit.params[0].estimate.value,
                expression: inputs.disk_expression,
            };
            if cell.radius_m.is_none() {
                warnings.push(format!(
                    "no radius entered: r = √(A/π) = {} from the area",
                    diffusor_trace::format_si(r, "m", 4)
                ));
            }
            // Late in a disk transient the current is nearly its steady state 4nFDCr, which
            // fixes D·C; D alone rests on the shrinking transient term, and so on the disk
            // expression chosen (ours and the published ones differ by up to 0.7 %).
            if let Some(rho) = fit.fit.correlations.first().and_then(|row| row.get(1))
                && rho.abs() > DISK_CORRELATION_LIMIT
            {
                warnings.push(format!(
                    "D and C are almost fully correlated in this window (r = {rho:.4}): the steady state fixes their product, and D alone rests on the short-time points and on the disk expression; start the window earlier if the charging allows, or compare D with the other disk expression"
                ));
            }
            let choice = choice_note(
                model,
                by_default,
                cell,
                inputs,
                &window,
                fit.fit.diffusion_m2_s.map(|d| d.value),
                &mut warnings,
            );
            let common = make_common(choice, window, warnings);
            from_model_fit(
                &fit.fit.clone(),
                common,
                ModelDetails::Microdisk(fit),
                curve,
            )
        }
        ModelKind::Sphere => {
            let r = radius().ok_or(missing(model, "the sphere radius"))?;
            let kind = if cell.geometry == Geometry::Hemisphere {
                SphereKind::Hemisphere
            } else {
                SphereKind::Sphere
            };
            let fit = fit_sphere(&data, kind, r, known)?;
            let curve = Curve::Sphere {
                nc: fit.fit.params[1].estimate.value,
                radius_m: r,
                d: fit.fit.params[0].estimate.value,
                kind,
            };
            let choice = choice_note(
                model,
                by_default,
                cell,
                inputs,
                &window,
                fit.fit.diffusion_m2_s.map(|d| d.value),
                &mut warnings,
            );
            let common = make_common(choice, window, warnings);
            from_model_fit(&fit.fit.clone(), common, ModelDetails::Sphere(fit), curve)
        }
        ModelKind::Kinetic => {
            let (a, c) = need_nac()?;
            let back = inputs
                .back_reaction
                .ok_or(missing(model, "the back reaction"))?;
            let kcell = KineticCell {
                n,
                area_m2: a,
                conc_mol_m3: c,
                back,
            };
            let fit = fit_kinetics(&data, &kcell)?;
            let curve = Curve::Kinetic {
                cell: kcell,
                kf: fit.fit.params[0].estimate.value,
                d: fit.fit.params[1].estimate.value,
            };
            let choice = choice_note(
                model,
                by_default,
                cell,
                inputs,
                &window,
                fit.fit.diffusion_m2_s.map(|d| d.value),
                &mut warnings,
            );
            let common = make_common(choice, window, warnings);
            from_model_fit(&fit.fit.clone(), common, ModelDetails::Kinetic(fit), curve)
        }
        ModelKind::Slab => {
            let a = area.ok_or(missing(model, "the electrode area"))?.value;
            let l = inputs
                .thickness_m
                .ok_or(missing(model, "the film thickness L"))?;
            let fit = fit_slab(&data, a, l, known)?;
            let curve = Curve::Slab {
                area_m2: a,
                nc: fit.fit.params[1].estimate.value,
                d: fit.fit.params[0].estimate.value,
                thickness_m: l,
            };
            let choice = choice_note(
                model,
                by_default,
                cell,
                inputs,
                &window,
                fit.fit.diffusion_m2_s.map(|d| d.value),
                &mut warnings,
            );
            let common = make_common(choice, window, warnings);
            from_model_fit(&fit.fit.clone(), common, ModelDetails::Slab(fit), curve)
        }
        ModelKind::Anson => {
            let (a, c) = need_nac()?;
            let dl = inputs
                .double_layer_charge_c
                .map(|q| DoubleLayerCharge { charge_c: q });
            let range = [window.lo.time_s, window.hi.time_s];
            let (fit, charge) = match &trace.charge_c {
                Some(q) => {
                    // The instrument's charge, counted from the step: the charge at the last
                    // sample before it is subtracted.
                    let q0 = prepared
                        .first
                        .checked_sub(1)
                        .and_then(|k| q.get(k))
                        .copied()
                        .unwrap_or(0.0);
                    let charge: Vec<f64> = q[prepared.first..segment.end]
                        .iter()
                        .map(|v| (v - q0) * sign)
                        .collect();
                    warnings.push("the charge is the file's charge column, counted from the last sample before the step".to_owned());
                    (
                        fit_anson(&prepared.time_s, &charge, Some(range), n, a, c, dl)?,
                        charge,
                    )
                }
                None => {
                    warnings.push("the file has no charge column: the charge is the current integrated from the step (√t trapezoids)".to_owned());
                    (
                        fit_anson_from_current(&all, Some(range), n, a, c, dl)?,
                        integrate_charge_c(&all),
                    )
                }
            };
            let slope = fit.fit.params[0].estimate.value;
            let intercept = fit.fit.params[1].estimate.value;
            let choice = choice_note(
                model,
                by_default,
                cell,
                inputs,
                &window,
                fit.fit.diffusion_m2_s.map(|d| d.value),
                &mut warnings,
            );
            let common = make_common(choice, window.clone(), warnings);
            let mut r = from_model_fit(
                &fit.fit.clone(),
                common,
                ModelDetails::Anson(fit),
                Curve::Anson { slope },
            );
            r.fitted_quantity = "charge";
            let lo = prepared
                .time_s
                .partition_point(|&t| t < window.lo.time_s - t0);
            let q = &charge[lo..lo + data.len()];
            r.r2 = r_squared(q, |i| slope * data.time_s[i].sqrt() + intercept);
            r
        }
        ModelKind::DoubleStep => {
            let rev = reverse_segment(trace, segment).ok_or(missing(model, "a reverse step"))?;
            let tau = rev.start_time_s - segment.start_time_s;
            let mut reverse = prepare(trace, rev, sign, &options.background)?;
            shift_onset(&mut reverse, t0);
            // The forward segment ends at the reversal; its window starts after charging.
            let forward = Transient {
                time_s: &prepared.time_s,
                current_a: &prepared.current_a,
            };
            let back = Transient {
                time_s: &reverse.time_s,
                current_a: &reverse.current_a,
            };
            let skip = (window.lo.time_s - t0).max(0.0);
            let n_area = area.map(|a| (n, a.value));
            let fit = fit_double_step(&forward, &back, tau, skip, n_area)?;
            window.hi = Bound::new(tau, true, BoundReason::EndOfData);
            window.hi.description =
                "the reversal (the reverse step is fitted from the same delay after it)".to_owned();
            let fw = forward.window(skip, tau);
            let rv = back.window(skip, f64::INFINITY);
            window.points = fw.len() + rv.len();
            let d = match (area, conc) {
                (Some(a), Some(c)) => Some(d_from_slope(
                    &fit.forward_slope,
                    n,
                    a.value,
                    c.value,
                    (fw.len() as f64 - 2.0).max(1.0),
                )),
                _ => None,
            };
            let mut params = vec![
                Param {
                    name: "forward Cottrell slope",
                    symbol: "S_f",
                    unit: "A·s^½",
                    estimate: fit.forward_slope,
                },
                Param {
                    name: "reverse slope",
                    symbol: "S_r",
                    unit: "A·s^½",
                    estimate: fit.reverse_slope,
                },
                Param {
                    name: "ratio −I_r(2τ)/I_f(τ) from the fits",
                    symbol: "ratio",
                    unit: "1",
                    estimate: fit.fitted_ratio,
                },
            ];
            if let Some(d) = d {
                params.push(Param {
                    name: "diffusion coefficient",
                    symbol: "D",
                    unit: "m²/s",
                    estimate: d,
                });
            }
            if let Some(g) = fit.charge.adsorbed_mol_m2 {
                params.push(Param {
                    name: "adsorbed amount",
                    symbol: "Γ",
                    unit: "mol/m²",
                    estimate: g,
                });
            }
            // The lines' intercepts, for the curve: a least-squares line passes through the
            // means, so each intercept is the mean of y − S·x.
            let b_f = mean_offset(&fw, |t| fit.forward_slope.value / t.sqrt());
            let theta = |tp: f64| 1.0 / tp.sqrt() - 1.0 / (tp + tau).sqrt();
            let neg: Vec<f64> = rv.current_a.iter().map(|i| -i).collect();
            let b_r = mean_offset(
                &Transient {
                    time_s: rv.time_s,
                    current_a: &neg,
                },
                |tp| fit.reverse_slope.value * theta(tp),
            );
            let curve = Curve::DoubleStep {
                forward: [fit.forward_slope.value, b_f],
                reverse: [fit.reverse_slope.value, b_r],
                tau_s: tau,
            };
            let fitted_f = |t: f64| fit.forward_slope.value / t.sqrt() + b_f;
            let fitted_r = |tp: f64| -(fit.reverse_slope.value * theta(tp) + b_r);
            let ys: Vec<f64> = fw.current_a.iter().chain(rv.current_a).copied().collect();
            let ts: Vec<(bool, f64)> = fw
                .time_s
                .iter()
                .map(|t| (true, *t))
                .chain(rv.time_s.iter().map(|t| (false, *t)))
                .collect();
            let r2 = r_squared(&ys, |i| {
                let (f, t) = ts[i];
                if f { fitted_f(t) } else { fitted_r(t) }
            });
            let rss: f64 = ys
                .iter()
                .zip(&ts)
                .map(|(y, (f, t))| (y - if *f { fitted_f(*t) } else { fitted_r(*t) }).powi(2))
                .sum();
            let dof = (ys.len() as f64 - 4.0).max(1.0);
            let choice = choice_note(
                model,
                by_default,
                cell,
                inputs,
                &window,
                d.map(|d| d.value),
                &mut warnings,
            );
            warnings.extend(fit.warnings.iter().map(|w| w.message.clone()));
            if d.is_none() {
                warnings.push("no area or concentration entered, so no D: the ratio and the intercepts need neither".to_owned());
            }
            ModelResult {
                model,
                variant: "double_step_planar",
                choice,
                equation: fit.equation,
                source: fit.source,
                validity: "planar semi-infinite diffusion; both steps at the diffusion limit; a stable product (the ratio tests it)",
                in_validity_range: fit.deviation_in_standard_errors.abs() <= 3.0,
                validity_check: format!(
                    "the fitted ratio {:.4} is {:.1} standard errors from the stable-product value {:.4}",
                    fit.fitted_ratio.value, fit.deviation_in_standard_errors, fit.expected_ratio
                ),
                geometry: cell.geometry,
                mode: "forward",
                window,
                t0_s: t0,
                background: prepared.background.clone(),
                diffusion_m2_s: d,
                conc_mol_m3: None,
                nac_mol_m: None,
                area_m2: None,
                params,
                correlations: Vec::new(),
                fitted_quantity: "current",
                points: ys.len(),
                residual_sd: (rss / dof).sqrt(),
                r2,
                iterations: 0,
                converged: true,
                termination: None,
                degrees_of_freedom: dof,
                warnings,
                details: ModelDetails::DoubleStep(fit),
                curve,
            }
        }
        ModelKind::Cottrell => {
            return cottrell(trace, segment, cell, options, inputs, by_default);
        }
    };
    if result.fitted_quantity == "current" && model != ModelKind::DoubleStep {
        let fitted: Vec<f64> = data.time_s.iter().map(|&t| result.predict_a(t)).collect();
        result.r2 = r_squared(data.current_a, |i| fitted[i]);
    }
    Ok(result)
}

/// The mean of `y − model(t)`: the least-squares intercept for a known slope.
fn mean_offset(w: &Transient<'_>, model: impl Fn(f64) -> f64) -> f64 {
    let n = w.len().max(1) as f64;
    w.time_s
        .iter()
        .zip(w.current_a)
        .map(|(t, y)| y - model(*t))
        .sum::<f64>()
        / n
}

/// The step segment right after `segment`, when there is one.
fn reverse_segment<'t>(trace: &'t Trace, segment: &Segment) -> Option<&'t Segment> {
    trace
        .segments
        .iter()
        .find(|s| s.kind == SegmentKind::Step && s.start == segment.end)
}

/// The step height in V: the segment's potential less the one before it, when the file has a
/// potential column.
fn step_height(trace: &Trace, segment: &Segment) -> Option<f64> {
    let here = segment.potential_v?;
    let before = trace
        .segments
        .iter()
        .rev()
        .find(|s| s.end <= segment.start)?
        .potential_v?;
    Some(here - before).filter(|v| *v != 0.0 && v.is_finite())
}

/// The Cottrell choice: the planar analysis, carried whole in the result.
fn cottrell(
    trace: &Trace,
    segment: &Segment,
    cell: &Cell,
    options: &PlanarOptions,
    inputs: &ModelInputs,
    by_default: bool,
) -> Result<ModelResult, ModelError> {
    let planar = analyze(trace, segment, cell, options)?;
    Ok(from_planar(planar, cell, inputs, by_default))
}

impl ModelResult {
    /// The result of the planar analysis in the shape every model shares, as
    /// [`analyze_model`] gives it for Cottrell (for callers that ran [`analyze`] themselves,
    /// such as the desktop window).
    pub fn from_planar(planar: PlanarResult, cell: &Cell, inputs: &ModelInputs) -> ModelResult {
        let by_default = ModelKind::default_for(cell.geometry) == ModelKind::Cottrell;
        from_planar(planar, cell, inputs, by_default)
    }
}

fn from_planar(
    planar: PlanarResult,
    cell: &Cell,
    inputs: &ModelInputs,
    by_default: bool,
) -> ModelResult {
    let model = ModelKind::Cottrell;
    let mut warnings = Vec::new();
    let choice = choice_note(
        model,
        by_default,
        cell,
        inputs,
        &planar.window,
        planar.diffusion_m2_s.map(|d| d.value),
        &mut warnings,
    );
    warnings.extend(planar.warnings.iter().map(|w| w.message.clone()));
    ModelResult {
        model,
        variant: planar.model,
        choice,
        equation: planar.equation,
        source: planar.source,
        validity: "planar semi-infinite diffusion at the diffusion limit, after double-layer charging and before natural convection or edge diffusion matter",
        in_validity_range: true,
        validity_check: "judged by the window rules: the bounds keep charging, convection and (for an electrode of known size) edge diffusion out".to_owned(),
        geometry: planar.geometry,
        mode: planar.mode,
        window: planar.window.clone(),
        t0_s: planar.t0.value,
        background: planar.background.clone(),
        diffusion_m2_s: planar.diffusion_m2_s,
        conc_mol_m3: None,
        nac_mol_m: planar.nac_mol_m,
        area_m2: planar.area_m2,
        params: planar.params.clone(),
        correlations: planar.correlations.clone(),
        fitted_quantity: "current",
        points: planar.window.points,
        residual_sd: planar.diagnostics.residual_sd_a,
        r2: planar.diagnostics.r2,
        iterations: 0,
        converged: true,
        termination: None,
        degrees_of_freedom: planar.diagnostics.degrees_of_freedom,
        warnings,
        details: ModelDetails::Planar(planar),
        curve: Curve::Planar,
    }
}
