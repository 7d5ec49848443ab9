//! Cottrell plus the double-layer charging current, fitted jointly, for when every point of
//! the transient is to be used (no charging window cut away).
//!
//! `I = S·(t − t0)^-½ + b + (ΔE/Ru)·exp(−(t − t0)/(Ru·Cdl))`, `S = n·F·A·C·√(D/π)` (Cottrell,
//! Z. Phys. Chem. 42 (1903) 385, plus the RC charging of the double layer through the
//! uncompensated resistance, A. J. Bard & L. R. Faulkner, *Electrochemical Methods*, 2nd ed.,
//! 2001), with the onset t0 free, on the model
//! [`crate::models::planar::ShiftedCottrellCharging`].

use nalgebra::DVector;
use serde::Serialize;

use crate::models::common::{
    ModelError, ModelFit, ModelWarningCode, Transient, estimate, linear_fit, param, positive,
    solve_with_noise, warning,
};
use crate::models::planar::{ShiftedCottrellCharging, diffusion_from_slope};
use crate::planar::Estimate;

/// The result of [`fit_cottrell_charging`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChargingFit {
    /// S (A·s^½), b (A), the onset t0 (s), the charging amplitude ΔE/Ru (A) and τ = Ru·Cdl
    /// (s), then D (m²/s) when n, A and C are given.
    pub fit: ModelFit,
    /// The fitted step onset t0 in s, on the time axis of the data (the importer's onset is 0).
    pub onset_s: Estimate,
    /// The charging amplitude `ΔE/Ru` in A at the fitted onset (interval from the fit in ln A).
    pub charging_amplitude_a: Estimate,
    /// The cell time constant `Ru·Cdl` in s (interval from the fit in ln τ).
    pub time_constant_s: Estimate,
    /// `Ru = ΔE/amplitude` in Ω and `Cdl = τ/Ru` in F, when the step height ΔE was given.
    pub ru_ohm_and_cdl_f: Option<(Estimate, Estimate)>,
}

const EQUATION: &str =
    "I = S·(t − t0)^-½ + b + (ΔE/Ru)·exp(−(t − t0)/(Ru·Cdl)), S = n·F·A·C·√(D/π)";
const SOURCE: &str = "F. G. Cottrell, Z. Phys. Chem. 42 (1903) 385; A. J. Bard & L. R. Faulkner, Electrochemical Methods, 2nd ed., Wiley 2001 (RC charging)";
const VALIDITY: &str = "planar semi-infinite diffusion at the diffusion limit; a single RC charging decay (ideal capacitor, constant Ru); the faradaic current itself is not delayed by Ru (true once t ≫ Ru·Cdl)";

/// Fits Cottrell plus charging to every point of `data`, with the onset t0 free. `nac` =
/// `(n, A in m², C in mol/m³)` gives D; `step_v` (the step height ΔE in V) gives Ru and Cdl.
///
/// The onset is fitted because the first points decide τ and the amplitude, and there an
/// onset error of half a sample (all an importer can promise) changes `t^-½` by a large
/// fraction: measured on the synthetic demo trace, a fixed onset 0.5 ms late gave D 29 % low
/// and a τ of 0.31 s where the generator's Ru·Cdl is 232 µs.
///
/// Starting values: for each onset on a grid from −1.5 to +0.8 times the first time and each
/// τ on a log grid from a tenth of the first time to the last time, S, b and the amplitude by
/// linear least squares on a subset of the points (every early point, the rest thinned); the
/// best pair with its linear coefficients starts Levenberg–Marquardt in
/// `[S, b, t0, ln A, ln τ]` on every point.
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
    let (t_sub, y_sub) = start_subset(data);
    let mut best: Option<(f64, [f64; 5])> = None;
    let (lo, hi) = ((0.1 * t_first).ln(), t_last.ln());
    let ones = vec![1.0; t_sub.len()];
    for f in [
        -1.5, -1.2, -1.0, -0.8, -0.6, -0.4, -0.2, 0.0, 0.2, 0.4, 0.6, 0.8,
    ] {
        let t0 = f * t_first;
        let inv_sqrt: Vec<f64> = t_sub.iter().map(|t| 1.0 / (t - t0).sqrt()).collect();
        for k in 0..=60 {
            let tau = (lo + (hi - lo) * f64::from(k) / 60.0).exp();
            let decay: Vec<f64> = t_sub.iter().map(|t| (-t / tau).exp()).collect();
            let Ok(line) = linear_fit(&[inv_sqrt.clone(), ones.clone(), decay], &y_sub) else {
                continue;
            };
            let rss = line.fit.residual_sum_of_squares;
            // A decaying charging current on a diffusion-limited one: both terms positive.
            if line.value(0) > 0.0 && line.value(2) > 0.0 && best.is_none_or(|b| rss < b.0) {
                best = Some((rss, [line.value(0), line.value(1), t0, line.value(2), tau]));
            }
        }
    }
    let Some((_, [s0, b0, t00, a0, tau0])) = best else {
        return Err(ModelError::NotIdentifiable(
            "no decaying charging current was found in the transient: use the planar Cottrell analysis".to_owned(),
        ));
    };
    let problem = ShiftedCottrellCharging {
        time_s: data.time_s,
        current_a: data.current_a,
        intercept: true,
    };
    let solved = solve_with_noise(
        &problem,
        DVector::from_vec(vec![s0, b0, t00, a0.ln(), tau0.ln()]),
    )?;
    let dof = solved.dof;
    let tq = crate::special::t975(dof);
    let log_estimate = |ln_v: f64, se: f64| Estimate {
        value: ln_v.exp(),
        std_error: ln_v.exp() * se,
        ci95: [(ln_v - tq * se).exp(), (ln_v + tq * se).exp()],
    };
    let cov = &solved.covariance;
    let (t0, ln_a_nominal, ln_tau) = (solved.value(2), solved.value(3), solved.value(4));
    let tau_value = ln_tau.exp();
    // The amplitude at the fitted onset: ln A0 = ln A − t0/τ. Its gradient in (t0, ln A, ln τ)
    // is (−1/τ, 1, t0/τ), which carries the fit's covariance into its standard error.
    let ln_a = ln_a_nominal - t0 / tau_value;
    let grad = [(2, -1.0 / tau_value), (3, 1.0), (4, t0 / tau_value)];
    let quad = |g: &[(usize, f64)], h: &[(usize, f64)]| -> f64 {
        g.iter()
            .flat_map(|&(i, gi)| h.iter().map(move |&(j, hj)| gi * hj * cov[(i, j)]))
            .sum()
    };
    let var_ln_a = quad(&grad, &grad).max(0.0);
    let amplitude = log_estimate(ln_a, var_ln_a.sqrt());
    let tau = log_estimate(ln_tau, solved.se(4));
    let onset = solved.estimate(2);
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
        param("step onset", "t0", "s", onset),
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
            // ln Ru = ln ΔE − ln A0 and ln Cdl = ln τ + ln A0 − ln ΔE.
            let ln_cdl = [(2, -1.0 / tau_value), (3, 1.0), (4, 1.0 + t0 / tau_value)];
            let ru_e = estimate(ru, ru * var_ln_a.sqrt(), dof);
            let cdl_e = estimate(cdl, cdl * quad(&ln_cdl, &ln_cdl).max(0.0).sqrt(), dof);
            params.push(param("uncompensated resistance", "Ru", "Ω", ru_e));
            params.push(param("double-layer capacitance", "Cdl", "F", cdl_e));
            Some((ru_e, cdl_e))
        }
        None => None,
    };
    let mut warnings = solved.residual_warnings();
    // The model holds when the charging decay is in the data well enough to determine it: τ
    // and the amplitude each to 10 % (a convention of this program). How many time constants
    // after the onset the first point lies is shown beside it.
    let since_onset = t_first - t0;
    let (rel_tau, rel_amp) = (
        tau.std_error / tau.value,
        amplitude.std_error / amplitude.value,
    );
    let resolved = rel_tau < 0.1 && rel_amp < 0.1;
    if !resolved {
        warnings.push(warning(
            ModelWarningCode::PoorlyDetermined,
            format!(
                "the first point is {:.1} time constants after the fitted onset: the charging decay is barely in the data, and τ and ΔE/Ru are determined only to {:.0} % and {:.0} %",
                since_onset / tau.value,
                100.0 * rel_tau,
                100.0 * rel_amp
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
            "τ = Ru·Cdl = {:.3e} s ± {:.1} % and ΔE/Ru ± {:.1} % (each must be within 10 %); the data start {:.3e} s after the fitted onset ({:.2} τ)",
            tau.value,
            100.0 * rel_tau,
            100.0 * rel_amp,
            since_onset,
            since_onset / tau.value
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
        onset_s: onset,
        charging_amplitude_a: amplitude,
        time_constant_s: tau,
        ru_ohm_and_cdl_f: ru_cdl,
    })
}

/// The points the start search uses: every one of the first 200, then about 400 more spread
/// evenly in log time, so the grid of linear fits stays cheap on a long trace while the early
/// points, which decide t0 and τ, are all kept.
fn start_subset(data: &Transient<'_>) -> (Vec<f64>, Vec<f64>) {
    let m = data.len();
    let head = m.min(200);
    let mut rows: Vec<usize> = (0..head).collect();
    if m > head {
        let ratio = (m as f64 / head as f64).ln() / 400.0;
        rows.extend(
            (1..=400).map(|k| ((head as f64 * (ratio * f64::from(k)).exp()) as usize).min(m - 1)),
        );
        rows.dedup();
    }
    (
        rows.iter().map(|&i| data.time_s[i]).collect(),
        rows.iter().map(|&i| data.current_a[i]).collect(),
    )
}
