//! Diffusion to a sphere or a hemisphere at the diffusion limit.
//!
//! `I(t) = n·F·A·D·C·(1/√(πDt) + 1/r₀)`, `A = 4πr₀²` (sphere) or `2πr₀²` (hemisphere on an
//! insulating plane) (A. J. Bard & L. R. Faulkner, *Electrochemical Methods*, 2nd ed., Wiley
//! 2001; the solution for a sphere in J. Crank, *The Mathematics of Diffusion*, 2nd ed.,
//! Oxford 1975, ch. 6). The current is linear in `t^-½`: `I = S·t^-½ + b` with
//! `S = n·F·A·C·√(D/π)` and `b = n·F·A·D·C/r₀`, so `b/S = √(πD)/r₀` and
//! `D = (r₀·b/S)²/π` without knowing C; `n·C = b·r₀/(F·A·D)` then follows.

use serde::Serialize;

use crate::constants::FARADAY_C_PER_MOL;
use crate::models::common::{
    Known, ModelError, ModelFit, ModelWarningCode, ScaledByNc, Transient, estimate, linear_fit,
    param, positive, warning,
};
use crate::planar::Estimate;

/// Whole sphere or hemisphere.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SphereKind {
    /// A whole sphere in solution, `A = 4πr₀²`.
    Sphere,
    /// A hemisphere on an insulating plane, `A = 2πr₀²`.
    Hemisphere,
}

impl SphereKind {
    /// The area in m² for radius `radius_m`.
    pub fn area_m2(self, radius_m: f64) -> f64 {
        let f = match self {
            SphereKind::Sphere => 4.0,
            SphereKind::Hemisphere => 2.0,
        };
        f * std::f64::consts::PI * radius_m * radius_m
    }
}

/// The diffusion-limited current to a sphere or hemisphere of radius `radius_m` (m) in A, for
/// `n` electrons, bulk concentration `conc_mol_m3` (mol/m³), diffusion coefficient `d_m2_s`
/// (m²/s) and time `t_s` (s): `I = n·F·A·D·C·(1/√(πDt) + 1/r₀)` (Bard & Faulkner 2001).
///
/// Valid for a sphere in an unbounded medium (or a hemisphere on an insulating plane) at the
/// diffusion limit, after double-layer charging and before natural convection.
pub fn sphere_current_a(
    n: f64,
    kind: SphereKind,
    radius_m: f64,
    conc_mol_m3: f64,
    d_m2_s: f64,
    t_s: f64,
) -> f64 {
    n * FARADAY_C_PER_MOL
        * kind.area_m2(radius_m)
        * d_m2_s
        * conc_mol_m3
        * (1.0 / (std::f64::consts::PI * d_m2_s * t_s).sqrt() + 1.0 / radius_m)
}

/// The closed-form route: the Cottrell-plot line `I = S·t^-½ + b` and D and n·C from it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SphereLine {
    /// Slope S in A·s^½.
    pub slope: Estimate,
    /// Intercept b in A (the steady-state current `n·F·A·D·C/r₀`).
    pub intercept: Estimate,
    /// `D = (r₀·b/S)²/π` in m²/s, standard error by the delta method with the slope–intercept
    /// covariance.
    pub diffusion_m2_s: Estimate,
    /// `n·C = b·r₀/(F·A·D)` in mol/m³.
    pub nc_mol_m3: Estimate,
}

/// The result of [`fit_sphere`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SphereFit {
    /// Parameters D (m²/s) and n·C (mol/m³) fitted together, then C or n.
    pub fit: ModelFit,
    /// The same answer from the straight line, for comparison.
    pub line: SphereLine,
}

const EQUATION: &str = "I = n·F·A·D·C·(1/√(πDt) + 1/r0), A = 4πr0² (sphere) or 2πr0² (hemisphere)";
const SOURCE: &str = "A. J. Bard & L. R. Faulkner, Electrochemical Methods, 2nd ed., Wiley 2001";
const VALIDITY: &str = "a whole sphere in unbounded solution (or a hemisphere on an insulating plane) at the diffusion limit; after double-layer charging, before natural convection; no constant background current (it would be read as the steady-state term)";

/// Fits D and n·C to a transient at a sphere or hemisphere of known radius.
///
/// # Errors
///
/// [`ModelError::InvalidInput`] for bad entries, [`ModelError::TooFewPoints`] below 4 points,
/// [`ModelError::NotIdentifiable`] when the Cottrell plot's intercept or slope is not positive,
/// [`ModelError::Fit`] when a solve fails.
pub fn fit_sphere(
    data: &Transient<'_>,
    kind: SphereKind,
    radius_m: f64,
    known: Known,
) -> Result<SphereFit, ModelError> {
    data.validate("sphere transient")?;
    positive("radius", radius_m)?;
    known.validate()?;
    let m = data.len();
    if m < 4 {
        return Err(ModelError::TooFewPoints {
            what: "sphere fit",
            points: m,
            needed: 4,
        });
    }
    let area = kind.area_m2(radius_m);
    let fa = FARADAY_C_PER_MOL * area;

    // The line first: it is the closed form and the starting point.
    let x: Vec<f64> = data.time_s.iter().map(|t| 1.0 / t.sqrt()).collect();
    let line = linear_fit(&[x, vec![1.0; m]], data.current_a)?;
    let (s, b) = (line.value(0), line.value(1));
    if !(s > 0.0 && b > 0.0) {
        return Err(ModelError::NotIdentifiable(format!(
            "the Cottrell plot has slope {s:.3e} A·s^½ and intercept {b:.3e} A; a sphere needs both positive (is the background subtracted, and is the electrode spherical?)"
        )));
    }
    let ratio = radius_m * b / s;
    let d_line = ratio * ratio / std::f64::consts::PI;
    // ∂D/∂b = 2D/b, ∂D/∂S = −2D/S.
    let c = &line.covariance;
    let (gs, gb) = (-2.0 * d_line / s, 2.0 * d_line / b);
    let var_d = gs * gs * c[(0, 0)] + 2.0 * gs * gb * c[(0, 1)] + gb * gb * c[(1, 1)];
    let nc_line = b * radius_m / (fa * d_line);
    // With D = r₀²b²/(πS²), n·C = b·r₀/(F·A·D) = π·S²/(F·A·r₀·b): ∂ln(nC)/∂ln S = 2 and
    // ∂ln(nC)/∂ln b = −1.
    let (hs, hb) = (2.0 * nc_line / s, -nc_line / b);
    let var_nc = hs * hs * c[(0, 0)] + 2.0 * hs * hb * c[(0, 1)] + hb * hb * c[(1, 1)];
    let line_result = SphereLine {
        slope: line.estimate(0),
        intercept: line.estimate(1),
        diffusion_m2_s: estimate(d_line, var_d.max(0.0).sqrt(), line.dof),
        nc_mol_m3: estimate(nc_line, var_nc.max(0.0).sqrt(), line.dof),
    };

    let problem = ScaledByNc {
        data: *data,
        shape: |d: f64, t: f64| {
            // g = F·A·(√(D/(πt)) + D/r₀); ∂g/∂D = F·A·(1/(2√(πDt)) + 1/r₀).
            let g = fa * ((d / (std::f64::consts::PI * t)).sqrt() + d / radius_m);
            let dg = fa * (0.5 / (std::f64::consts::PI * d * t).sqrt() + 1.0 / radius_m);
            (g, dg)
        },
    };
    let solved = crate::models::common::solve_with_noise(
        &problem,
        nalgebra::DVector::from_vec(vec![d_line, nc_line]),
    )?;
    let d = solved.estimate(0);
    let nc = solved.estimate(1);
    let params = vec![
        param("diffusion coefficient", "D", "m²/s", d),
        param("n·C", "nC", "mol/m³", nc),
        known.derived(nc),
    ];
    let mut warnings = solved.residual_warnings();
    // The steady-state term's share at the last point: the data must reach where 1/r₀ matters,
    // or the intercept (and so D) is poorly determined.
    let t_last = data.time_s[m - 1];
    let t_first = data.time_s[0];
    let share = |t: f64| {
        let a = 1.0 / (std::f64::consts::PI * d.value * t).sqrt();
        (1.0 / radius_m) / (a + 1.0 / radius_m)
    };
    let (share_first, share_last) = (share(t_first), share(t_last));
    if share_last < 0.1 {
        warnings.push(warning(
            ModelWarningCode::PoorlyDetermined,
            format!(
                "the steady-state term is only {:.1} % of the current at the last point: the intercept, and with it D, is poorly determined; record to longer times",
                100.0 * share_last
            ),
        ));
    }
    warnings.push(warning(
        ModelWarningCode::Assumption,
        "a constant background current adds to the intercept b and biases D upward: subtract the background first".to_owned(),
    ));
    let fit = ModelFit {
        model: match kind {
            SphereKind::Sphere => "sphere",
            SphereKind::Hemisphere => "hemisphere",
        },
        equation: EQUATION,
        source: SOURCE,
        validity: VALIDITY,
        // The equation is exact for every t > 0 in its geometry; what can fail is only
        // identifiability, reported as a warning.
        in_validity_range: true,
        validity_check: format!(
            "exact for all t > 0 in this geometry; the steady-state term is {:.1} % of the current at the first point and {:.1} % at the last",
            100.0 * share_first,
            100.0 * share_last
        ),
        params,
        correlations: solved.correlations(),
        diffusion_m2_s: Some(d),
        iterations: solved.fit.iterations,
        converged: solved.fit.termination.is_converged(),
        termination: solved.fit.termination,
        points: m,
        residual_sd: solved.fit.residual_standard_deviation,
        noise: solved.noise,
        degrees_of_freedom: solved.dof,
        warnings,
    };
    Ok(SphereFit {
        fit,
        line: line_result,
    })
}
