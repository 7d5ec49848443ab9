//! Chronocoulometry: the Anson plot of charge against √t.
//!
//! After a step to the diffusion limit at a planar electrode the charge is
//! `Q(t) = 2·n·F·A·C·√(D·t/π) + Q_dl + n·F·A·Γ` (F. C. Anson, Anal. Chem. 36 (1964) 932; the
//! integral of Cottrell's current plus the double-layer charge and the charge of adsorbed
//! reactant Γ, which is reduced at once). A straight line `Q = m·√t + q` gives
//! `D = π·(m/(2·n·F·A·C))²` from the slope and `q = Q_dl + n·F·A·Γ` from the intercept; with
//! `Q_dl` known from a blank or entered, `Γ = (q − Q_dl)/(n·F·A)`.

use serde::Serialize;

use crate::cell::Measured;
use crate::constants::FARADAY_C_PER_MOL;
use crate::models::common::{
    ModelError, ModelFit, ModelWarningCode, Transient, estimate, linear_fit, param, positive,
    warning,
};
use crate::planar::Estimate;

/// The charge from the step to each sample, in C, from the current by the trapezoid rule in
/// `u = √t`: `Q = ∫ I dt = ∫ 2u·I du`, and `2u·I` is constant for a Cottrell current, so the
/// rule is exact for it and accurate for Cottrell plus smooth terms (plain trapezoids in t are
/// not, near the `t^-½` singularity). The charge before the first sample `t₀` is taken as
/// `2·I(t₀)·t₀`, the Cottrell value; any other charge before it (fast charging) ends up in
/// the Anson intercept. Times after the step in s, currents in A.
pub fn integrate_charge_c(data: &Transient<'_>) -> Vec<f64> {
    let n = data.len();
    let mut q = Vec::with_capacity(n);
    if n == 0 {
        return q;
    }
    let (t, i) = (data.time_s, data.current_a);
    let mut acc = 2.0 * i[0] * t[0];
    q.push(acc);
    for k in 1..n {
        let (u0, u1) = (t[k - 1].sqrt(), t[k].sqrt());
        acc += 0.5 * (2.0 * u0 * i[k - 1] + 2.0 * u1 * i[k]) * (u1 - u0);
        q.push(acc);
    }
    q
}

/// The double-layer charge to subtract from the intercept.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DoubleLayerCharge {
    /// Q_dl in C with its standard uncertainty (from a blank or entered).
    pub charge_c: Measured,
}

/// The result of [`fit_anson`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnsonFit {
    /// Slope m (C/s^½) and intercept q (C), then D (m²/s), and Γ (mol/m²) when Q_dl is known.
    pub fit: ModelFit,
    /// The intercept `Q_dl + n·F·A·Γ` in C.
    pub intercept_c: Estimate,
    /// Adsorbed amount Γ in mol/m², when Q_dl was given; its standard error includes Q_dl's.
    pub adsorbed_mol_m2: Option<Estimate>,
    /// The window fitted, in s.
    pub window_s: [f64; 2],
}

const EQUATION: &str = "Q = 2·n·F·A·C·√(D·t/π) + Q_dl + n·F·A·Γ";
const SOURCE: &str = "F. C. Anson, Anal. Chem. 36 (1964) 932";
const VALIDITY: &str = "planar semi-infinite diffusion at the diffusion limit; after double-layer charging is complete (the charge is then constant); Γ assumes the adsorbed reactant is reduced at once and Q_dl is the same with and without the reactant";

/// Fits the Anson line to a charge transient (`charge_c` at `time_s`, C and s after the step)
/// over `window_s` (all points when `None`), with `n`, the area `area_m2` and the
/// concentration `conc_mol_m3` known, and an optional double-layer charge.
///
/// The charge of an integrated current has correlated errors (each sample carries all earlier
/// noise); the sandwich covariance with the residuals' AR(1) model allows for that, but the
/// intervals are approximate for such strongly correlated errors.
///
/// # Errors
///
/// [`ModelError::InvalidInput`] for bad entries, [`ModelError::TooFewPoints`] below 4 points
/// in the window, [`ModelError::NotIdentifiable`] for a slope that is not positive,
/// [`ModelError::Fit`] when a solve fails.
pub fn fit_anson(
    time_s: &[f64],
    charge_c: &[f64],
    window_s: Option<[f64; 2]>,
    n: f64,
    area_m2: f64,
    conc_mol_m3: f64,
    double_layer: Option<DoubleLayerCharge>,
) -> Result<AnsonFit, ModelError> {
    anson_core(
        time_s,
        charge_c,
        window_s,
        [n, area_m2, conc_mol_m3],
        double_layer,
        None,
    )
}

/// Integrates a current transient ([`integrate_charge_c`]) and fits the Anson line, with a
/// covariance for the integrated noise.
///
/// The charge of an integrated current carries every earlier sample's noise: its errors are a
/// random walk, `e_j = Σ_{k ≤ j} c_k·ε_k` with `c_k` the quadrature weight of sample k and `ε`
/// the current's own white noise. The intercept, and so Γ, is only as good as the sampling of
/// the charging spike: charge that passes before the first sample is credited with the Cottrell
/// value `2·I₀·t₀`, so record from well inside the spike (or use a measured charge column with
/// [`fit_anson`]). The autoregressive model of [`fit_anson`] underestimates
/// such errors badly (measured: 18 of 40 intervals held the true D). Here the covariance of
/// the least-squares line is computed for the random walk itself,
/// `Cov = (XᵀX)⁻¹·σ²·Σ_k c_k²·s_k·s_kᵀ·(XᵀX)⁻¹` with `s_k = Σ_{j ≥ k} x_j` over the window, plus
/// the charge accumulated before the window, which only moves the intercept; `σ²` is the
/// variance of the current about the derivative of the Anson line, `m/(2√t)`, in the window.
///
/// # Errors
///
/// As [`fit_anson`].
pub fn fit_anson_from_current(
    data: &Transient<'_>,
    window_s: Option<[f64; 2]>,
    n: f64,
    area_m2: f64,
    conc_mol_m3: f64,
    double_layer: Option<DoubleLayerCharge>,
) -> Result<AnsonFit, ModelError> {
    data.validate("current transient")?;
    let q = integrate_charge_c(data);
    anson_core(
        data.time_s,
        &q,
        window_s,
        [n, area_m2, conc_mol_m3],
        double_layer,
        Some(data.current_a),
    )
}

/// Quadrature weight of each current sample in the charge (the √t trapezoid of
/// [`integrate_charge_c`]: `∂Q/∂I_k` for a charge well after sample k).
fn quadrature_weights(t: &[f64]) -> Vec<f64> {
    let n = t.len();
    let u: Vec<f64> = t.iter().map(|t| t.sqrt()).collect();
    (0..n)
        .map(|k| {
            let before = if k == 0 {
                2.0 * t[0] / (2.0 * u[0])
            } else {
                0.5 * (u[k] - u[k - 1])
            };
            let after = if k + 1 < n {
                0.5 * (u[k + 1] - u[k])
            } else {
                0.0
            };
            2.0 * u[k] * (before + after)
        })
        .collect()
}

fn anson_core(
    time_s: &[f64],
    charge_c: &[f64],
    window_s: Option<[f64; 2]>,
    [n, area_m2, conc_mol_m3]: [f64; 3],
    double_layer: Option<DoubleLayerCharge>,
    integrated_from: Option<&[f64]>,
) -> Result<AnsonFit, ModelError> {
    let all = Transient {
        time_s,
        current_a: charge_c,
    };
    all.validate("charge transient")?;
    positive("n", n)?;
    positive("area", area_m2)?;
    positive("concentration", conc_mol_m3)?;
    let [lo, hi] = window_s.unwrap_or([0.0, f64::INFINITY]);
    let w = all.window(lo, hi);
    if w.len() < 4 {
        return Err(ModelError::TooFewPoints {
            what: "Anson fit",
            points: w.len(),
            needed: 4,
        });
    }
    let x: Vec<f64> = w.time_s.iter().map(|t| t.sqrt()).collect();
    let mut line = linear_fit(&[x.clone(), vec![1.0; w.len()]], w.current_a)?;
    if let Some(current) = integrated_from {
        random_walk_covariance(&mut line, time_s, current, &x, lo);
    }
    let slope = line.estimate(0);
    let intercept = line.estimate(1);
    if !(slope.value > 0.0) {
        return Err(ModelError::NotIdentifiable(format!(
            "the Anson plot's slope is {:.3e} C/s^½; a diffusion-limited charge grows with √t (check the sign)",
            slope.value
        )));
    }
    let nfa = n * FARADAY_C_PER_MOL * area_m2;
    let k = slope.value / (2.0 * nfa * conc_mol_m3);
    let d = std::f64::consts::PI * k * k;
    let d_est = estimate(d, 2.0 * d * slope.std_error / slope.value, line.dof);
    let adsorbed = double_layer.map(|dl| {
        let g = (intercept.value - dl.charge_c.value) / nfa;
        let se = (intercept.std_error.powi(2) + dl.charge_c.u.powi(2)).sqrt() / nfa;
        estimate(g, se, line.dof)
    });
    let mut params = vec![
        param("Anson slope", "m", "C/s^½", slope),
        param("Anson intercept (Q_dl + nFAΓ)", "q", "C", intercept),
        param("diffusion coefficient", "D", "m²/s", d_est),
    ];
    if let Some(g) = adsorbed {
        params.push(param("adsorbed amount", "Γ", "mol/m²", g));
    }
    let mut warnings = line.residual_warnings();
    if double_layer.is_none() {
        warnings.push(warning(
            ModelWarningCode::Assumption,
            "no double-layer charge given: the intercept holds Q_dl and n·F·A·Γ together; record a blank (supporting electrolyte alone, same step) to separate them".to_owned(),
        ));
    }
    let window = [w.time_s[0], w.time_s[w.len() - 1]];
    let fit = ModelFit {
        model: "anson_chronocoulometry",
        equation: EQUATION,
        source: SOURCE,
        validity: VALIDITY,
        in_validity_range: true,
        validity_check: "not judged from the data: the window must start after charging, which the user or the charging estimate sets".to_owned(),
        params,
        correlations: line.correlations(),
        diffusion_m2_s: Some(d_est),
        iterations: line.fit.iterations,
        converged: line.fit.termination.is_converged(),
        termination: line.fit.termination,
        points: w.len(),
        residual_sd: line.fit.residual_standard_deviation,
        noise: line.noise,
        degrees_of_freedom: line.dof,
        warnings,
    };
    Ok(AnsonFit {
        fit,
        intercept_c: intercept,
        adsorbed_mol_m2: adsorbed,
        window_s: window,
    })
}

/// Replaces the covariance of `line` (fitted on the window of `time_s` starting at `lo_s`, with
/// regressor `x = √t`) by the random-walk covariance of [`fit_anson_from_current`].
fn random_walk_covariance(
    line: &mut crate::models::common::Solved,
    time_s: &[f64],
    current_a: &[f64],
    x: &[f64],
    lo_s: f64,
) {
    random_walk_covariance_for(line, time_s, current_a, x, lo_s, |t, m| {
        m / (2.0 * t.sqrt())
    });
}

/// [`random_walk_covariance`] for any regressor `x(t)`: `line_current(t, m)` is the current the
/// line `Q = m·x(t) + q` implies, `m·dx/dt`.
pub(crate) fn random_walk_covariance_for(
    line: &mut crate::models::common::Solved,
    time_s: &[f64],
    current_a: &[f64],
    x: &[f64],
    lo_s: f64,
    line_current: impl Fn(f64, f64) -> f64,
) {
    let a = time_s.partition_point(|&t| t < lo_s);
    let b = a + x.len();
    let m = line.value(0);
    // The current's own noise about the line's derivative.
    let resid: Vec<f64> = (a..b)
        .map(|k| current_a[k] - line_current(time_s[k], m))
        .collect();
    let mean = resid.iter().sum::<f64>() / resid.len() as f64;
    let s2 = resid.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (resid.len() - 2) as f64;
    let c = quadrature_weights(time_s);
    // Xᵀ·Cov(e)·X for the in-window random walk: Σ_k c_k²·s_k s_kᵀ with suffix sums s_k.
    let (mut sx, mut s1) = (0.0, 0.0);
    let mut middle = nalgebra::Matrix2::<f64>::zeros();
    for j in (0..x.len()).rev() {
        sx += x[j];
        s1 += 1.0;
        let k = a + j;
        let w = c[k] * c[k];
        // The first in-window sample's noise is shared with the offset handled below.
        if j > 0 {
            let v = nalgebra::Vector2::new(sx, s1);
            middle += v * v.transpose() * w;
        }
    }
    let xtx = nalgebra::Matrix2::new(
        x.iter().map(|v| v * v).sum::<f64>(),
        x.iter().sum::<f64>(),
        x.iter().sum::<f64>(),
        x.len() as f64,
    );
    let Some(inv) = xtx.try_inverse() else {
        return;
    };
    let mut cov = inv * middle * inv * s2;
    // Everything accumulated up to the window's first sample is one common offset of all its
    // charges: it moves only the intercept, by its own variance.
    let offset_var: f64 = (0..=a.min(time_s.len() - 1))
        .map(|k| c[k] * c[k])
        .sum::<f64>()
        * s2;
    cov[(1, 1)] += offset_var;
    for i in 0..2 {
        for j in 0..2 {
            line.covariance[(i, j)] = cov[(i, j)];
        }
    }
    line.noise = crate::regression::NoiseModel::WHITE;
    line.dof = (x.len() as f64 - 2.0).max(1.0);
}

/// The double-layer charge from a blank transient (supporting electrolyte alone, the same
/// step): the intercept of its own Anson line over `window_s`, in C. A blank's charge is
/// nearly constant after charging, so the slope is near zero and the intercept is `Q_dl`.
///
/// # Errors
///
/// As [`fit_anson`]'s input checks; [`ModelError::Fit`] when the line fails.
pub fn double_layer_from_blank(
    time_s: &[f64],
    charge_c: &[f64],
    window_s: Option<[f64; 2]>,
) -> Result<DoubleLayerCharge, ModelError> {
    let all = Transient {
        time_s,
        current_a: charge_c,
    };
    all.validate("blank charge transient")?;
    let [lo, hi] = window_s.unwrap_or([0.0, f64::INFINITY]);
    let w = all.window(lo, hi);
    if w.len() < 4 {
        return Err(ModelError::TooFewPoints {
            what: "blank Anson fit",
            points: w.len(),
            needed: 4,
        });
    }
    let x: Vec<f64> = w.time_s.iter().map(|t| t.sqrt()).collect();
    let line = linear_fit(&[x, vec![1.0; w.len()]], w.current_a)?;
    Ok(DoubleLayerCharge {
        charge_c: Measured::new(line.value(1), line.se(1)),
    })
}
