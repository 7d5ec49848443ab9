//! Which model suits a transient: from the electrode's geometry and size, the time window and a
//! rough D, a recommendation and the reason for it.
//!
//! The measure for a disk (or a plane of finite size) is the edge share `√(π·D·t)/r`, the ratio
//! of the disk's edge current `π·n·F·D·C·r` to its Cottrell current `n·F·π·r²·C·√(D/(πt))`
//! (the first two terms of the disk's short-time series: D. Shoup & A. Szabo, J. Electroanal.
//! Chem. 140 (1982) 237). Planar diffusion is recommended while the share stays below 5 % at
//! the window's end; **that threshold is a convention of this program**, not a published rule:
//! at a 5 % share the current exceeds Cottrell's by 5 %, which a planar fit without an
//! intercept turns into up to about 10 % in D (D goes with the slope squared), while a fit with
//! an intercept absorbs most of the edge current as background.

use serde::Serialize;

use crate::cell::Geometry;
use crate::models::common::{ModelError, positive};

/// Edge share at the window's end below which the planar model is recommended (a convention of
/// this program).
pub const PLANAR_EDGE_SHARE_LIMIT: f64 = 0.05;

/// `√(π·D·t)/r`: the disk's edge current over its Cottrell current (dimensionless), for
/// `d_m2_s` (m²/s), `t_s` (s) and `radius_m` (m).
pub fn edge_share(d_m2_s: f64, t_s: f64, radius_m: f64) -> f64 {
    (std::f64::consts::PI * d_m2_s * t_s).sqrt() / radius_m
}

/// What the helper is told.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ChoiceInput {
    /// Electrode geometry.
    pub geometry: Geometry,
    /// Radius in m (disk, sphere, hemisphere), if known.
    pub radius_m: Option<f64>,
    /// Film thickness in m for an insertion electrode with one face blocked, if any.
    pub thickness_m: Option<f64>,
    /// The time window after the step, `[start, end]` in s.
    pub window_s: [f64; 2],
    /// A rough diffusion coefficient in m²/s (an order of magnitude suffices).
    pub rough_d_m2_s: f64,
}

/// The model recommended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum RecommendedModel {
    /// Planar semi-infinite diffusion: the Cottrell analysis.
    Planar,
    /// The inlaid disk ([`crate::models::microdisk`]); for a large disk with a small edge share
    /// the edge-corrected form ([`crate::models::edge`]) says how far planar would be off.
    Disk,
    /// A whole sphere ([`crate::models::sphere`]).
    Sphere,
    /// A hemisphere on an insulating plane ([`crate::models::sphere`]).
    Hemisphere,
    /// A finite slab with one face blocked ([`crate::models::slab`]).
    FiniteSlab,
}

/// The recommendation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelChoice {
    /// The model.
    pub model: RecommendedModel,
    /// Edge share `√(πDt)/r` at the window's start and end, for a disk or plane of known size.
    pub edge_share: Option<[f64; 2]>,
    /// `D·t/L²` at the window's start and end, for a slab.
    pub slab_time: Option<[f64; 2]>,
    /// Why, in plain language with the numbers.
    pub reason: String,
}

/// Recommends a model for the window, and says why.
///
/// # Errors
///
/// [`ModelError::InvalidInput`] for a window that is not positive and increasing, or a
/// non-positive D, radius or thickness.
pub fn recommend_model(input: &ChoiceInput) -> Result<ModelChoice, ModelError> {
    let [t0, t1] = input.window_s;
    positive("window start", t0)?;
    positive("window end", t1)?;
    if !(t1 > t0) {
        return Err(ModelError::InvalidInput {
            what: "window end",
            requirement: "later than the window start",
            value: t1,
        });
    }
    let d = positive("rough diffusion coefficient", input.rough_d_m2_s)?;
    if let Some(r) = input.radius_m {
        positive("radius", r)?;
    }
    if let Some(l) = input.thickness_m {
        let l = positive("thickness", l)?;
        let x = [d * t0 / (l * l), d * t1 / (l * l)];
        let regime = if x[1] < 0.05 {
            "the window stays in the Cottrell regime (Dt/L² < 0.05, where the far face changes the current by less than 2·exp(−20)), so D and ΔC enter only together; the series still fits, but the planar analysis with ΔC known is equivalent"
        } else if x[0] > 0.5 {
            "the window lies in the long-time regime (Dt/L² > 0.5): ln I falls linearly in t and gives D with L alone"
        } else {
            "the window spans the change from Cottrell to exponential decay, where the full series determines D and ΔC together"
        };
        return Ok(ModelChoice {
            model: RecommendedModel::FiniteSlab,
            edge_share: None,
            slab_time: Some(x),
            reason: format!(
                "a film of thickness {:.3e} m with one face blocked: Dt/L² runs from {:.3e} to {:.3e}; {regime}",
                l, x[0], x[1]
            ),
        });
    }
    match input.geometry {
        Geometry::Sphere | Geometry::Hemisphere => {
            let model = if input.geometry == Geometry::Sphere {
                RecommendedModel::Sphere
            } else {
                RecommendedModel::Hemisphere
            };
            let reason = match input.radius_m {
                Some(r) => {
                    // The steady-state term's share of the current, r0⁻¹/(r0⁻¹ + (πDt)^-½).
                    let share = |t: f64| {
                        let s = edge_share(d, t, r);
                        s / (1.0 + s)
                    };
                    format!(
                        "a {} of radius {r:.3e} m: the steady-state term is {:.1} % of the current at the window's start and {:.1} % at its end; the spherical equation holds at all times, and D follows from the Cottrell plot's slope and intercept",
                        input.geometry.name(),
                        100.0 * share(t0),
                        100.0 * share(t1)
                    )
                }
                None => format!(
                    "a {} by geometry; its radius is needed to fit it",
                    input.geometry.name()
                ),
            };
            Ok(ModelChoice {
                model,
                edge_share: None,
                slab_time: None,
                reason,
            })
        }
        Geometry::Planar | Geometry::Microdisk => {
            let Some(r) = input.radius_m else {
                return Ok(ModelChoice {
                    model: if input.geometry == Geometry::Microdisk {
                        RecommendedModel::Disk
                    } else {
                        RecommendedModel::Planar
                    },
                    edge_share: None,
                    slab_time: None,
                    reason: "no size given, so the edge share could not be judged; the model follows the geometry entered".to_owned(),
                });
            };
            let share = [edge_share(d, t0, r), edge_share(d, t1, r)];
            let (model, reason) = if share[1] < PLANAR_EDGE_SHARE_LIMIT {
                (
                    RecommendedModel::Planar,
                    format!(
                        "the edge share √(πDt)/r stays below {:.1} % (it reaches {:.2} % at the window's end), under this program's 5 % limit: planar diffusion",
                        100.0 * PLANAR_EDGE_SHARE_LIMIT,
                        100.0 * share[1]
                    ),
                )
            } else {
                (
                    RecommendedModel::Disk,
                    format!(
                        "the edge share √(πDt)/r reaches {:.1} % at the window's end (from {:.2} % at its start), over this program's 5 % limit for planar diffusion: the disk model{}",
                        100.0 * share[1],
                        100.0 * share[0],
                        if share[1] < 0.2 {
                            "; the edge-corrected fit also shows how far a planar answer would be off"
                        } else {
                            ""
                        }
                    ),
                )
            };
            Ok(ModelChoice {
                model,
                edge_share: Some(share),
                slab_time: None,
                reason,
            })
        }
    }
}
