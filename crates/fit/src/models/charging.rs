//! Cottrell plus the double-layer charging current, fitted jointly, for when every point of
//! the transient is to be used (no charging window cut away).
//!
//! `I = S·t^-½ + b + (ΔE/Ru)·exp(−t/(Ru·Cdl))`, `S = n·F·A·C·√(D/π)` (Cottrell, Z. Phys. Chem.
//! 42 (1903) 385, plus the RC charging of the double layer through the uncompensated
//! resistance, A. J. Bard & L. R. Faulkner, *Electrochemical Methods*, 2nd ed., 2001),
//! on the model [`crate::models::planar::CottrellCharging`].

use nalgebra::DVector;
use serde::Serialize;

use crate::models::common::{
    ModelError, ModelFit, ModelWarningCode, Transient, estimate, linear_fit, param, positive,
    solve_with_noise, warning,
};
use crate::models::planar::{CottrellCharging, diffusion_from_slope};
use crate::planar::Estimate;

/// The result of [`fit_cottrell_charging`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChargingFit {
    /// S (A·s^½), b (A), the charging amplitude ΔE/Ru (A) and τ = Ru·Cdl (s), then D (m²/s)
    /// when n, A and C are given.
    pub fit: ModelFit,
    /// The charging amplitude `ΔE/Ru` in A (interval from the fit in ln A).
    pub charging_amplitude_a: Estimate,
    /// The cell time constant `Ru·Cdl` in s (interval from the fit in ln τ).
    pub time_constant_s: Estimate,
    /// `Ru = ΔE/amplitude` in Ω and `Cdl = τ/Ru` in F, when the step height ΔE was given.
    pub ru_ohm_and_cdl_f: Option<(Estimate, Estimate)>,
}

const EQUATION: &str = "I = S·t^-½ + b + (ΔE/Ru)·exp(−t/(Ru·Cdl)), S = n·F·A·C·√(D/π)";
const SOURCE: &str = "F. G. Cottrell, Z. Phys. Chem. 42 (1903) 385; A. J. Bard & L. R. Faulkner, Electrochemical Methods, 2nd ed., Wiley 2001 (RC charging)";
const VALIDITY: &str = "planar semi-infinite diffusion at the diffusion limit; a single RC charging decay (ideal capacitor, constant Ru); the faradaic current itself is not delayed by Ru (true once t ≫ Ru·Cdl)";

/// Fits Cottrell plus charging to every point of `data`. `nac` = `(n, A in m², C in mol/m³)`
/// gives D; `step_v` (the step height ΔE in V) gives Ru and Cdl.
///
/// Starting values: for each τ on a log grid from a tenth of the first time to the last time,
/// S, b and the amplitude by linear least squares; the best τ with its linear coefficients
/// starts Levenberg–Marquardt in `[S, b, ln A, ln τ]`.
///
/// # Errors
///
/// [`ModelError::InvalidInput`] for bad entries, [`ModelError::TooFewPoints`] below 8 points,
/// [`ModelError::NotIdentifiable`] when no decaying charging current is found or the Cottrell
/// slope is not positive,
/// [`ModelError::Fit`] when the solver fails.
pub fn fit_cottrell_charging(
    data: &Transient<'_>,
    nac: Option<(f64, f64, f64)>,
    step_v: Option<f64>,
) -> Result<ChargingFit, ModelError> {
    data.validate("transient")?;
    let m = data.len();
    if m < 8 {
        return Err(ModelError::TooFewPoints {
            what: "Cottrell-plus-charging fit",
            points: m,
            needed: 8,
        });
    }
    let (t_first, t_last) = (data.time_s[0], data.time_s[m - 1]);
    let inv_sqrt: Vec<f64> = data.time_s.iter().map(|t| 1.0 / t.sqrt()).collect();
    let mut best: Option<(f64, f64, [f64; 3])> = None;
    let (lo, hi) = ((0.1 * t_first).ln(), t_last.ln());
    for k in 0..=60 {
        let tau = (lo + (hi - lo) * f64::from(k) / 60.0).exp();
        let decay: Vec<f64> = data.time_s.iter().map(|t| (-t / tau).exp()).collect();
        let Ok(line) = linear_fit(&[inv_sqrt.clone(), vec![1.0; m], decay], data.current_a) else {
            continue;
        };
        let rss = line.fit.residual_sum_of_squares;
        if line.value(2) > 0.0 && best.is_none_or(|b| rss < b.0) {
            best = Some((rss, tau, [line.value(0), line.value(1), line.value(2)]));
        }
    }
    let Some((_, tau0, [s0, b0, a0])) = best else {
        return Err(ModelError::NotIdentifiable(
            "no decaying charging current was found in the transient: use the planar Cottrell analysis".to_owned(),
        ));
    };
    let problem = CottrellCharging {
        time_s: data.time_s,
        current_a: data.current_a,
    };
    let solved = solve_with_noise(
        &problem,
        DVector::from_vec(vec![s0, b0, a0.ln(), tau0.ln()]),
    )?;
    let dof = solved.dof;
    let exp_estimate = |j: usize| {
        let v = solved.value(j).exp();
        let se = solved.se(j);
        let t = crate::models::common::t_quantile(dof);
        Estimate {
            value: v,
            std_error: v * se,
            ci95: [
                (solved.value(j) - t * se).exp(),
                (solved.value(j) + t * se).exp(),
            ],
        }
    };
    let amplitude = exp_estimate(2);
    let tau = exp_estimate(3);
    let slope = solved.estimate(0);
    if !(slope.value > 0.0) {
        return Err(ModelError::NotIdentifiable(format!(
            "the fitted Cottrell slope is {:.3e} A·s^½: the transient does not decay like a diffusion-limited current",
            slope.value
        )));
    }
    let mut params = vec![
        param("Cottrell slope", "S", "A·s^½", slope),
        param("background current", "b", "A", solved.estimate(1)),
        param("charging amplitude ΔE/Ru", "ΔE/Ru", "A", amplitude),
        param("cell time constant Ru·Cdl", "τ", "s", tau),
    ];
    let diffusion = match nac {
        Some((n, area, conc)) => {
            positive("n", n)?;
            positive("area", area)?;
            positive("concentration", conc)?;
            let d = diffusion_from_slope(slope.value, n, area, conc);
            let e = estimate(d, 2.0 * d * slope.std_error / slope.value, dof);
            params.push(param("diffusion coefficient", "D", "m²/s", e));
            Some(e)
        }
        None => None,
    };
    let ru_cdl = match step_v {
        Some(de) => {
            positive("step height", de.abs())?;
            let ru = de.abs() / amplitude.value;
            let cdl = tau.value / ru;
            // ln Ru = ln ΔE − ln A, ln Cdl = ln τ − ln ΔE + ln A.
            let (va, vt, cat) = (
                solved.covariance[(2, 2)],
                solved.covariance[(3, 3)],
                solved.covariance[(2, 3)],
            );
            let ru_e = estimate(ru, ru * va.sqrt(), dof);
            let cdl_e = estimate(cdl, cdl * (va + vt + 2.0 * cat).max(0.0).sqrt(), dof);
            params.push(param("uncompensated resistance", "Ru", "Ω", ru_e));
            params.push(param("double-layer capacitance", "Cdl", "F", cdl_e));
            Some((ru_e, cdl_e))
        }
        None => None,
    };
    let mut warnings = solved.residual_warnings();
    let resolved = t_first < 3.0 * tau.value;
    if !resolved {
        warnings.push(warning(
            ModelWarningCode::PoorlyDetermined,
            format!(
                "the first point is {:.1} time constants after the step: the charging decay is barely in the data and its amplitude and τ are poorly determined",
                t_first / tau.value
            ),
        ));
    }
    let fit = ModelFit {
        model: "cottrell_plus_charging",
        equation: EQUATION,
        source: SOURCE,
        validity: VALIDITY,
        in_validity_range: resolved,
        validity_check: format!(
            "τ = Ru·Cdl = {:.3e} s; the data start at {:.3e} s ({:.2} τ)",
            tau.value,
            t_first,
            t_first / tau.value
        ),
        params,
        correlations: solved.correlations(),
        diffusion_m2_s: diffusion,
        iterations: solved.fit.iterations,
        converged: solved.fit.termination.is_converged(),
        termination: solved.fit.termination,
        points: m,
        residual_sd: solved.fit.residual_standard_deviation,
        noise: solved.noise,
        degrees_of_freedom: dof,
        warnings,
    };
    Ok(ChargingFit {
        fit,
        charging_amplitude_a: amplitude,
        time_constant_s: tau,
        ru_ohm_and_cdl_f: ru_cdl,
    })
}
