//! Double potential step at a planar electrode: forward step to the diffusion limit for the
//! reactant at t = 0, reverse step at t = τ to the diffusion limit for the product.
//!
//! - Chronoamperometry (W. M. Schwarz & I. Shain, J. Phys. Chem. 69 (1965) 30): for a stable
//!   product, the reverse current `I_r(t) = −n·F·A·C·√(D/π)·(1/√(t − τ) − 1/√t)` for t > τ
//!   (in the form of A. J. Bard & L. R. Faulkner, *Electrochemical Methods*, 2nd ed., 2001),
//!   so `−I_r(2τ)/I_f(τ) = 1 − 1/√2 = 0.2929`. A smaller ratio means the product is lost
//!   (a following chemical reaction); the ratio is reported against that value.
//! - Chronocoulometry (J. H. Christie, R. A. Osteryoung & F. C. Anson, J. Electroanal. Chem. 13
//!   (1967) 236): with `Q_r(t) = Q(τ) − Q(t)` the charge returned after the reversal,
//!   `Q_r = 2·n·F·A·C·√(D/π)·θ + Q_dl` with `θ = √τ + √(t − τ) − √t`, while the forward charge is
//!   `Q_f = 2·n·F·A·C·√(D/π)·√t + Q_dl + n·F·A·Γ`. The difference of the two intercepts is
//!   `n·F·A·Γ` when only the reactant is adsorbed (as remembered from that paper: a
//!   re-adsorption correction of the reverse intercept is neglected here, which is not
//!   verified).

use serde::Serialize;

use crate::constants::FARADAY_C_PER_MOL;
use crate::models::anson::{integrate_charge_c, random_walk_covariance_for};
use crate::models::common::{
    ModelError, ModelWarning, ModelWarningCode, Transient, estimate, linear_fit, positive, warning,
};
use crate::planar::Estimate;

/// `1 − 1/√2`, the Schwarz–Shain ratio `−I_r(2τ)/I_f(τ)` for a stable product.
pub const SCHWARZ_SHAIN_RATIO: f64 = 1.0 - std::f64::consts::FRAC_1_SQRT_2;

/// The reverse current of a double step at a planar electrode, in A (negative: opposite to the
/// forward current), `t_since_reversal_s` after the reversal at `tau_s` (both s), for `n`,
/// `area_m2`, `conc_mol_m3`, `d_m2_s`: `−n·F·A·C·√(D/π)·(1/√t′ − 1/√(t′ + τ))` (Schwarz & Shain
/// 1965; Bard & Faulkner 2001). Valid for a stable product, planar semi-infinite
/// diffusion and both steps at the diffusion limit.
pub fn reverse_current_a(
    n: f64,
    area_m2: f64,
    conc_mol_m3: f64,
    d_m2_s: f64,
    tau_s: f64,
    t_since_reversal_s: f64,
) -> f64 {
    let s = crate::models::planar::cottrell_slope(n, area_m2, conc_mol_m3, d_m2_s);
    -s * (1.0 / t_since_reversal_s.sqrt() - 1.0 / (t_since_reversal_s + tau_s).sqrt())
}

/// The chronocoulometric part of a double step.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DoubleStepCharge {
    /// Forward Anson slope (C/s^½).
    pub forward_slope: Estimate,
    /// Forward intercept `Q_dl + n·F·A·Γ` (C).
    pub forward_intercept_c: Estimate,
    /// Reverse slope against θ (C/s^½); equal to the forward slope for a stable product.
    pub reverse_slope: Estimate,
    /// Reverse intercept, `Q_dl` for a non-adsorbed product (C).
    pub reverse_intercept_c: Estimate,
    /// `Γ = (q_f − q_r)/(n·F·A)` in mol/m², when n and A are given.
    pub adsorbed_mol_m2: Option<Estimate>,
}

/// The result of [`fit_double_step`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DoubleStepFit {
    /// The switching time τ (s).
    pub tau_s: f64,
    /// Forward Cottrell slope `S_f` from `I_f = S_f·t^-½ + b_f` (A·s^½).
    pub forward_slope: Estimate,
    /// Reverse slope `S_r` from `−I_r = S_r·(t′^-½ − (t′ + τ)^-½) + b_r` (A·s^½).
    pub reverse_slope: Estimate,
    /// `−I_r(2τ)/I_f(τ)` from the measured currents, interpolated linearly, when both times
    /// are inside the data (dimensionless).
    pub point_ratio: Option<f64>,
    /// The same ratio from the fits, `(S_r/S_f)·(1 − 1/√2)` (dimensionless).
    pub fitted_ratio: Estimate,
    /// `1 − 1/√2` (Schwarz & Shain 1965).
    pub expected_ratio: f64,
    /// `(fitted − expected)/standard error` (dimensionless).
    pub deviation_in_standard_errors: f64,
    /// The chronocoulometric intercepts (Christie, Osteryoung & Anson 1967).
    pub charge: DoubleStepCharge,
    /// The equation and its source.
    pub equation: &'static str,
    /// Sources.
    pub source: &'static str,
    /// Warnings.
    pub warnings: Vec<ModelWarning>,
}

/// Linear interpolation of `y(t)` at `at`; the ends count as inside within 1e-9 relative, so a
/// segment that ends at τ up to rounding still gives its last value.
fn interpolate(t: &[f64], y: &[f64], at: f64) -> Option<f64> {
    let close = |a: f64, b: f64| (a - b).abs() <= 1e-9 * a.abs().max(b.abs());
    let (first, last) = (*t.first()?, *t.last()?);
    if close(at, first) {
        return Some(y[0]);
    }
    if close(at, last) {
        return Some(y[y.len() - 1]);
    }
    let k = t.partition_point(|&x| x < at);
    if k == 0 || k >= t.len() {
        return None;
    }
    let f = (at - t[k - 1]) / (t[k] - t[k - 1]);
    Some(y[k - 1] + f * (y[k] - y[k - 1]))
}

/// Analyses a double step: `forward` holds times after the forward step (s) and its current
/// (A, positive), `reverse` times after the reversal (s) and its current in the same sign
/// convention (so negative), `tau_s` the duration of the forward step; points earlier than
/// `skip_s` after either step are left out of the fits (charging). `n_area` = `(n, A in m²)`
/// turns the intercept difference into Γ.
///
/// # Errors
///
/// [`ModelError::InvalidInput`] for bad entries, [`ModelError::TooFewPoints`] below 4 points
/// in either fit, [`ModelError::NotIdentifiable`] for a forward slope that is not positive,
/// [`ModelError::Fit`] when a line fails.
pub fn fit_double_step(
    forward: &Transient<'_>,
    reverse: &Transient<'_>,
    tau_s: f64,
    skip_s: f64,
    n_area: Option<(f64, f64)>,
) -> Result<DoubleStepFit, ModelError> {
    forward.validate("forward segment")?;
    reverse.validate("reverse segment")?;
    positive("switching time τ", tau_s)?;
    if !(skip_s >= 0.0 && skip_s.is_finite()) {
        return Err(ModelError::InvalidInput {
            what: "skip",
            requirement: "a finite time >= 0",
            value: skip_s,
        });
    }
    let fw = forward.window(skip_s, tau_s);
    let rv = reverse.window(skip_s, f64::INFINITY);
    for (what, w) in [("forward fit", &fw), ("reverse fit", &rv)] {
        if w.len() < 4 {
            return Err(ModelError::TooFewPoints {
                what,
                points: w.len(),
                needed: 4,
            });
        }
    }
    let theta_current = |tp: f64| 1.0 / tp.sqrt() - 1.0 / (tp + tau_s).sqrt();
    let f_line = linear_fit(
        &[
            fw.time_s.iter().map(|t| 1.0 / t.sqrt()).collect(),
            vec![1.0; fw.len()],
        ],
        fw.current_a,
    )?;
    let neg_ir: Vec<f64> = rv.current_a.iter().map(|i| -i).collect();
    let r_line = linear_fit(
        &[
            rv.time_s.iter().map(|&t| theta_current(t)).collect(),
            vec![1.0; rv.len()],
        ],
        &neg_ir,
    )?;
    let (sf, sr) = (f_line.estimate(0), r_line.estimate(0));
    if !(sf.value > 0.0) {
        return Err(ModelError::NotIdentifiable(format!(
            "the forward Cottrell slope is {:.3e} A·s^½; the forward current must be positive",
            sf.value
        )));
    }
    let ratio = sr.value / sf.value * SCHWARZ_SHAIN_RATIO;
    let rel = ((sr.std_error / sr.value).powi(2) + (sf.std_error / sf.value).powi(2)).sqrt();
    let fitted_ratio = estimate(ratio, ratio.abs() * rel, f_line.dof.min(r_line.dof));
    let deviation = (ratio - SCHWARZ_SHAIN_RATIO) / fitted_ratio.std_error;
    let point_ratio = match (
        interpolate(forward.time_s, forward.current_a, tau_s),
        interpolate(reverse.time_s, reverse.current_a, tau_s),
    ) {
        (Some(f), Some(r)) if f != 0.0 => Some(-r / f),
        _ => None,
    };

    // Chronocoulometry: forward charge against √t; charge returned after the reversal against
    // θ = √τ + √t′ − √(τ + t′).
    let qf = integrate_charge_c(forward);
    let neg_rev: Vec<f64> = reverse.current_a.iter().map(|i| -i).collect();
    let qr = integrate_charge_c(&Transient {
        time_s: reverse.time_s,
        current_a: &neg_rev,
    });
    let fa = forward.window(skip_s, tau_s);
    let a0 = forward.time_s.partition_point(|&t| t < skip_s);
    let xf: Vec<f64> = fa.time_s.iter().map(|t| t.sqrt()).collect();
    let mut qf_line = linear_fit(&[xf.clone(), vec![1.0; xf.len()]], &qf[a0..a0 + xf.len()])?;
    random_walk_covariance_for(
        &mut qf_line,
        forward.time_s,
        forward.current_a,
        &xf,
        skip_s,
        |t, m| m / (2.0 * t.sqrt()),
    );
    let r0 = reverse.time_s.partition_point(|&t| t < skip_s);
    let xr: Vec<f64> = rv
        .time_s
        .iter()
        .map(|&t| tau_s.sqrt() + t.sqrt() - (tau_s + t).sqrt())
        .collect();
    let mut qr_line = linear_fit(&[xr.clone(), vec![1.0; xr.len()]], &qr[r0..r0 + xr.len()])?;
    random_walk_covariance_for(
        &mut qr_line,
        reverse.time_s,
        &neg_rev,
        &xr,
        skip_s,
        |t, m| 0.5 * m * theta_current(t),
    );
    let (qi_f, qi_r) = (qf_line.estimate(1), qr_line.estimate(1));
    let adsorbed = n_area.map(|(n, area)| {
        let nfa = n * FARADAY_C_PER_MOL * area;
        estimate(
            (qi_f.value - qi_r.value) / nfa,
            (qi_f.std_error.powi(2) + qi_r.std_error.powi(2)).sqrt() / nfa,
            qf_line.dof.min(qr_line.dof),
        )
    });
    let mut warnings = Vec::new();
    if deviation.abs() > 3.0 {
        warnings.push(warning(
            ModelWarningCode::OutsideValidity,
            format!(
                "the ratio −I_r(2τ)/I_f(τ) = {ratio:.4} differs from the stable-product value 0.2929 by {deviation:.1} standard errors: a product lost to a following reaction lowers it; unequal charging, an uncompensated resistance or convection also move it"
            ),
        ));
    }
    warnings.push(warning(
        ModelWarningCode::Assumption,
        "the reverse step is assumed to reach the diffusion limit for the product, and the product not to be adsorbed (for Γ from the intercepts)".to_owned(),
    ));
    Ok(DoubleStepFit {
        tau_s,
        forward_slope: sf,
        reverse_slope: sr,
        point_ratio,
        fitted_ratio,
        expected_ratio: SCHWARZ_SHAIN_RATIO,
        deviation_in_standard_errors: deviation,
        charge: DoubleStepCharge {
            forward_slope: qf_line.estimate(0),
            forward_intercept_c: qi_f,
            reverse_slope: qr_line.estimate(0),
            reverse_intercept_c: qi_r,
            adsorbed_mol_m2: adsorbed,
        },
        equation: "I_r(t) = −n·F·A·C·√(D/π)·(1/√(t − τ) − 1/√t); −I_r(2τ)/I_f(τ) = 1 − 1/√2; Q_r = 2·n·F·A·C·√(D/π)·(√τ + √(t − τ) − √t) + Q_dl",
        source: "W. M. Schwarz & I. Shain, J. Phys. Chem. 69 (1965) 30; J. H. Christie, R. A. Osteryoung & F. C. Anson, J. Electroanal. Chem. 13 (1967) 236",
        warnings,
    })
}
