//! Finite heterogeneous electron-transfer kinetics at the stepped potential, planar electrode.
//!
//! After a step to a potential where the reduction (or oxidation) has the first-order rate
//! constant `kf` and the back reaction `kb`, with only the reactant present at first, the current
//! at a planar electrode is
//!
//! `I(t) = n·F·A·kf·C·exp(H²t)·erfc(H√t)`,  `H = kf/√D_O + kb/√D_R`
//!
//! (A. J. Bard & L. R. Faulkner, *Electrochemical Methods*, 2nd ed., Wiley 2001, for the
//! step to a potential of finite rate; the irreversible case `kb = 0` goes back to the
//! integral-equation treatment of P. Delahay, *New Instrumental Methods in Electrochemistry*,
//! Interscience 1954). `exp(H²t)·erfc(H√t)` is evaluated as [`erfcx`] so that it stays finite for
//! any `H√t`. The limits are Cottrell's current times `1 − 1/(2H²t)` for `H√t ≫ 1`
//! (Abramowitz & Stegun 1964, eq. 7.1.23) and `n·F·A·kf·C·(1 − 2H√t/√π)` for `H√t ≪ 1`
//! (Abramowitz & Stegun 1964).

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use crate::constants::FARADAY_C_PER_MOL;
use crate::models::common::{
    ModelError, ModelFit, ModelWarningCode, Transient, log_grid_min, param, positive,
    solve_with_noise, warning,
};
use crate::special::{erfcx, erfcx_derivative};

/// The back reaction at the stepped potential.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Default)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum BackReaction {
    /// `kb = 0`: totally irreversible at this potential, `H = kf/√D`.
    #[default]
    Irreversible,
    /// Quasi-reversible: `kb = θ·kf` with `θ = kb/kf` known (for Butler–Volmer kinetics
    /// `θ = exp(n·F·(E − E°′)/(R·T))`, Bard & Faulkner 2001), and `D_R = ρ·D_O` with the
    /// ratio `ρ` known, so `H = (kf/√D_O)·(1 + θ/√ρ)`.
    QuasiReversible {
        /// `kb/kf` at the stepped potential (dimensionless, ≥ 0).
        kb_over_kf: f64,
        /// `D_R/D_O` (dimensionless, > 0; 1 when unknown).
        dr_over_do: f64,
    },
}

impl BackReaction {
    /// The factor `q` in `H = q·kf/√D_O`.
    pub fn h_factor(self) -> f64 {
        match self {
            BackReaction::Irreversible => 1.0,
            BackReaction::QuasiReversible {
                kb_over_kf,
                dr_over_do,
            } => 1.0 + kb_over_kf / dr_over_do.sqrt(),
        }
    }

    fn validate(self) -> Result<(), ModelError> {
        if let BackReaction::QuasiReversible {
            kb_over_kf,
            dr_over_do,
        } = self
        {
            if !(kb_over_kf >= 0.0 && kb_over_kf.is_finite()) {
                return Err(ModelError::InvalidInput {
                    what: "kb/kf",
                    requirement: "a finite number >= 0",
                    value: kb_over_kf,
                });
            }
            positive("D_R/D_O", dr_over_do)?;
        }
        Ok(())
    }
}

/// The kinetically limited current `I = n·F·A·kf·C·erfcx(H√t)`, `H = q·kf/√D` with
/// `q = back.h_factor()`, in A, for `n` electrons, area `area_m2` (m²), bulk concentration
/// `conc_mol_m3` (mol/m³), rate constant `kf_m_s` (m/s), diffusion coefficient `d_m2_s` (m²/s)
/// of the reactant and time `t_s` (s) after the step.
///
/// Source: Bard & Faulkner 2001 (see the module documentation). Valid for planar
/// semi-infinite diffusion with constant `kf` and `kb` (a potential step with negligible
/// uncompensated resistance) and no product present before the step.
pub fn kinetic_current_a(
    n: f64,
    area_m2: f64,
    conc_mol_m3: f64,
    kf_m_s: f64,
    d_m2_s: f64,
    back: BackReaction,
    t_s: f64,
) -> f64 {
    let h = back.h_factor() * kf_m_s / d_m2_s.sqrt();
    n * FARADAY_C_PER_MOL * area_m2 * kf_m_s * conc_mol_m3 * erfcx(h * t_s.sqrt())
}

/// The kinetic model as a least-squares problem in `[kf, D]` (m/s, m²/s), with `n·A·C` known.
#[derive(Debug, Clone, Copy)]
pub struct KineticStep<'a> {
    /// The data.
    pub data: Transient<'a>,
    /// `n·F·A·C` in C/m (A·s/m: the current per unit of `kf`).
    pub nfac: f64,
    /// The back reaction.
    pub back: BackReaction,
}

impl KineticStep<'_> {
    fn model(&self, kf: f64, d: f64, t: f64) -> (f64, f64, f64) {
        // I = K·kf·E(x), x = q·kf·√(t/D); ∂I/∂kf = K·(E + x·E′), ∂I/∂D = −K·kf·E′·x/(2D).
        let x = self.back.h_factor() * kf * (t / d).sqrt();
        let e = erfcx(x);
        let de = erfcx_derivative(x);
        let i = self.nfac * kf * e;
        (
            i,
            self.nfac * (e + x * de),
            -self.nfac * kf * de * x / (2.0 * d),
        )
    }
}

impl crate::solver::LeastSquaresProblem for KineticStep<'_> {
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
        let (kf, d) = (p[0], p[1]);
        DVector::from_fn(self.data.len(), |i, _| {
            if kf > 0.0 && d > 0.0 {
                self.data.current_a[i] - self.model(kf, d, self.data.time_s[i]).0
            } else {
                f64::NAN
            }
        })
    }

    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
        let (kf, d) = (p[0], p[1]);
        let mut j = DMatrix::zeros(self.data.len(), 2);
        for i in 0..self.data.len() {
            let (_, dk, dd) = self.model(kf, d, self.data.time_s[i]);
            j[(i, 0)] = -dk;
            j[(i, 1)] = -dd;
        }
        j
    }
}

/// What the kinetic fit needs to know about the cell.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct KineticCell {
    /// Electrons per molecule.
    pub n: f64,
    /// Electrode area in m².
    pub area_m2: f64,
    /// Bulk concentration in mol/m³.
    pub conc_mol_m3: f64,
    /// The back reaction.
    pub back: BackReaction,
}

/// The result of [`fit_kinetics`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct KineticsFit {
    /// Parameters `kf` (m/s) and `D` (m²/s), then the derived `H` (s^-½).
    pub fit: ModelFit,
    /// `H√t` at the first and the last point of the window (dimensionless).
    pub h_sqrt_t_range: [f64; 2],
    /// How far the first point's current lies below Cottrell's for the fitted D, in %.
    pub shortfall_at_first_point_percent: f64,
}

const EQUATION: &str =
    "I = n·F·A·kf·C·exp(H²t)·erfc(H√t), H = kf/√D_O + kb/√D_R, computed with erfcx";
const SOURCE: &str = "A. J. Bard & L. R. Faulkner, Electrochemical Methods, 2nd ed., Wiley 2001 (potential step to a potential of finite rate)";
const VALIDITY: &str = "planar semi-infinite diffusion; constant kf (and kb) after the step, i.e. negligible uncompensated resistance and charging; no product before the step; kf and D both determined when H√t spans about 3 from below to above within the window";

/// Below this `H√t` at the first point the current is at least ~10 % under Cottrell's, so the
/// kinetics are resolved (a convention of this program: at `H√t = 3` the shortfall
/// `1/(2H²t)` is 5.6 %).
const RESOLVED_H_SQRT_T: f64 = 3.0;

/// Fits `kf` and `D` to a transient at a planar electrode with `n`, `A`, `C` known.
///
/// Starting values: `D` from the mean of `I·√t` over the last half of the window (Cottrell,
/// corrected by `q`), then `kf` as the best of a log grid from 1e-9 to 10 m/s with that `D`.
///
/// # Errors
///
/// [`ModelError::InvalidInput`] for impossible cell entries or times;
/// [`ModelError::TooFewPoints`] below 5 points; [`ModelError::NotIdentifiable`] when the
/// current is Cottrellian from the first point (kf too large to see) or never approaches
/// Cottrell (D not determined); [`ModelError::Fit`] when the solver fails.
pub fn fit_kinetics(data: &Transient<'_>, cell: &KineticCell) -> Result<KineticsFit, ModelError> {
    data.validate("kinetic transient")?;
    positive("n", cell.n)?;
    positive("area", cell.area_m2)?;
    positive("concentration", cell.conc_mol_m3)?;
    cell.back.validate()?;
    let m = data.len();
    if m < 5 {
        return Err(ModelError::TooFewPoints {
            what: "kinetic fit",
            points: m,
            needed: 5,
        });
    }
    let nfac = cell.n * FARADAY_C_PER_MOL * cell.area_m2 * cell.conc_mol_m3;
    let q = cell.back.h_factor();

    // Cottrell at long times: I·√t → n·F·A·C·√D/(q·√π).
    let half = &data.time_s[m / 2..];
    let s_late = half
        .iter()
        .zip(&data.current_a[m / 2..])
        .map(|(t, i)| i * t.sqrt())
        .sum::<f64>()
        / half.len() as f64;
    if !(s_late > 0.0) {
        return Err(ModelError::NotIdentifiable(
            "the current is not positive at long times; check the sign and the background"
                .to_owned(),
        ));
    }
    let d0 = std::f64::consts::PI * (q * s_late / nfac).powi(2);
    let problem = KineticStep {
        data: *data,
        nfac,
        back: cell.back,
    };
    let rss_for = |kf: f64, d: f64| {
        let model: Vec<f64> = data
            .time_s
            .iter()
            .map(|&t| problem.model(kf, d, t).0)
            .collect();
        model
            .iter()
            .zip(data.current_a)
            .map(|(f, y)| (y - f).powi(2))
            .sum::<f64>()
    };
    let (kf_lo, kf_hi) = (1e-9, 10.0);
    let kf0 = log_grid_min(kf_lo, kf_hi, 200, |kf| rss_for(kf, d0));
    let t_first = data.time_s[0];
    let t_last = data.time_s[m - 1];
    if q * kf0 * (t_first / d0).sqrt() > 30.0 {
        return Err(ModelError::NotIdentifiable(format!(
            "the current follows Cottrell's law from the first point ({}): kf is too large to measure in this window (H√t > 30); use the planar Cottrell analysis or shorter times",
            crate::fmt_s(t_first)
        )));
    }
    // A grid optimum at the lower edge means the current never approaches the diffusion limit.
    if kf0 <= kf_lo * 1.0001 {
        return Err(ModelError::NotIdentifiable(
            "the current stays far below Cottrell's throughout: D is not determined by this window (record to longer times)".to_owned(),
        ));
    }

    let solved = solve_with_noise(&problem, DVector::from_vec(vec![kf0, d0]))?;
    let (kf, d) = (solved.value(0), solved.value(1));
    let h = q * kf / d.sqrt();
    // H = q·kf·D^-½: var(H) by the delta method from the 2×2 covariance.
    let gk = q / d.sqrt();
    let gd = -0.5 * h / d;
    let c = &solved.covariance;
    let var_h = gk * gk * c[(0, 0)] + 2.0 * gk * gd * c[(0, 1)] + gd * gd * c[(1, 1)];
    let dof = solved.dof;
    let params = vec![
        param("forward rate constant", "kf", "m/s", solved.estimate(0)),
        param("diffusion coefficient", "D", "m²/s", solved.estimate(1)),
        param(
            "kinetic parameter H = q·kf/√D",
            "H",
            "s^-½",
            crate::models::common::estimate(h, var_h.max(0.0).sqrt(), dof),
        ),
    ];
    let x_first = h * t_first.sqrt();
    let x_last = h * t_last.sqrt();
    let cottrell_first = nfac * d.sqrt() / (q * (std::f64::consts::PI * t_first).sqrt());
    let shortfall = 100.0 * (1.0 - problem.model(kf, d, t_first).0 / cottrell_first);

    let mut warnings = solved.residual_warnings();
    let kinetics_resolved = x_first < RESOLVED_H_SQRT_T;
    let diffusion_resolved = x_last > RESOLVED_H_SQRT_T;
    if kinetics_resolved || shortfall > 1.0 {
        warnings.push(warning(
            ModelWarningCode::KineticLimitation,
            format!(
                "the current at {} is {shortfall:.1} % below Cottrell's: slow electron transfer; an uncompensated resistance or slow double-layer charging lowers the early current in the same way, so check Ru, and a larger step (further past E°′, where kf is larger) would bring the current to the diffusion limit",
                crate::fmt_s(t_first)
            ),
        ));
    }
    if !kinetics_resolved {
        warnings.push(warning(
            ModelWarningCode::PoorlyDetermined,
            format!(
                "H√t is already {x_first:.1} at the first point: the kinetic part of the transient is barely in the window, so kf is poorly determined"
            ),
        ));
    }
    if !diffusion_resolved {
        warnings.push(warning(
            ModelWarningCode::PoorlyDetermined,
            format!(
                "H√t reaches only {x_last:.1} at the last point: the current never comes close to Cottrell's, so D is poorly determined"
            ),
        ));
    }
    let fit = ModelFit {
        model: match cell.back {
            BackReaction::Irreversible => "planar_irreversible_kinetics",
            BackReaction::QuasiReversible { .. } => "planar_quasi_reversible_kinetics",
        },
        equation: EQUATION,
        source: SOURCE,
        validity: VALIDITY,
        in_validity_range: kinetics_resolved && diffusion_resolved,
        validity_check: format!(
            "H√t runs from {x_first:.3} to {x_last:.3}; both kf and D are determined when it spans {RESOLVED_H_SQRT_T} (a convention of this program)"
        ),
        params,
        correlations: solved.correlations(),
        diffusion_m2_s: Some(solved.estimate(1)),
        iterations: solved.fit.iterations,
        converged: solved.fit.termination.is_converged(),
        termination: solved.fit.termination,
        points: m,
        residual_sd: solved.fit.residual_standard_deviation,
        noise: solved.noise,
        degrees_of_freedom: dof,
        warnings,
    };
    Ok(KineticsFit {
        fit,
        h_sqrt_t_range: [x_first, x_last],
        shortfall_at_first_point_percent: shortfall,
    })
}
