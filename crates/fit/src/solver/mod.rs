//! Nonlinear least squares by Levenberg–Marquardt.
//!
//! A model is a [`LeastSquaresProblem`]: residuals `r(p) = y − f(p)` (with
//! any weighting already applied) and their analytic Jacobian `∂r/∂p`.
//! [`solve`] runs [`LevenbergMarquardt`] under argmin's executor and returns
//! a [`NonlinearFit`] with the covariance `s²·(JᵀJ)⁻¹` at the solution.
//! [`ArgminProblem`] makes any such model an argmin problem, for callers who
//! want to drive the executor themselves (to attach an observer, say).

mod lm;

use argmin::core::{CostFunction, Executor, Jacobian, Operator, State, TerminationReason};
use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

use crate::error::FitError;
use crate::linalg::Equilibrated;
pub use lm::{LevenbergMarquardt, LmState};

/// A least-squares model: residuals and their Jacobian as functions of the
/// parameters.
///
/// `residuals` returns `rᵢ(p) = yᵢ − f(xᵢ; p)`, already multiplied by
/// `√wᵢ` for a weighted fit, so that the fit minimises `Σ rᵢ²`. `jacobian`
/// returns the `m × n` matrix `∂rᵢ/∂pⱼ` (note the sign: the derivative of
/// the residual, `−√wᵢ·∂f/∂pⱼ`). Both must be analytic, not differenced,
/// so that the covariance is as accurate as the fit. A model that is
/// undefined at `p` should return non-finite residuals there; the solver
/// treats such a point as a failed step.
pub trait LeastSquaresProblem {
    /// Residual vector `r(p)` (length `m`, the number of observations).
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64>;
    /// Jacobian `∂r/∂p` (`m` rows, one column per parameter).
    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64>;
}

impl<T: LeastSquaresProblem + ?Sized> LeastSquaresProblem for &T {
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
        (**self).residuals(p)
    }
    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
        (**self).jacobian(p)
    }
}

/// Adapter that presents a [`LeastSquaresProblem`] to argmin as an
/// [`Operator`] (the residual vector), a [`Jacobian`] and a
/// [`CostFunction`] (the residual sum of squares `‖r‖²`).
pub struct ArgminProblem<'a, P: ?Sized> {
    problem: &'a P,
}

impl<'a, P: ?Sized> ArgminProblem<'a, P> {
    /// Wraps `problem` by reference.
    pub fn new(problem: &'a P) -> Self {
        Self { problem }
    }
}

impl<P: ?Sized> std::fmt::Debug for ArgminProblem<'_, P> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("ArgminProblem")
            .field("problem", &std::any::type_name::<P>())
            .finish()
    }
}

impl<P: LeastSquaresProblem + ?Sized> Operator for ArgminProblem<'_, P> {
    type Param = DVector<f64>;
    type Output = DVector<f64>;

    fn apply(&self, p: &Self::Param) -> Result<Self::Output, argmin::core::Error> {
        Ok(self.problem.residuals(p))
    }
}

impl<P: LeastSquaresProblem + ?Sized> Jacobian for ArgminProblem<'_, P> {
    type Param = DVector<f64>;
    type Jacobian = DMatrix<f64>;

    fn jacobian(&self, p: &Self::Param) -> Result<Self::Jacobian, argmin::core::Error> {
        Ok(self.problem.jacobian(p))
    }
}

impl<P: LeastSquaresProblem + ?Sized> CostFunction for ArgminProblem<'_, P> {
    type Param = DVector<f64>;
    type Output = f64;

    fn cost(&self, p: &Self::Param) -> Result<Self::Output, argmin::core::Error> {
        Ok(self.problem.residuals(p).norm_squared())
    }
}

/// Tolerances and budgets for [`solve`], with the meanings of MINPACK's
/// `lmder` (Moré, Garbow & Hillstrom, *User Guide for MINPACK-1*, ANL-80-74,
/// 1980, ch. 2).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct SolveOptions {
    /// Stop when both the actual and the predicted relative reduction of the
    /// sum of squares are at most this (dimensionless).
    pub ftol: f64,
    /// Stop when the trust-region radius is at most this times the scaled
    /// norm of the parameters, i.e. the relative change of the parameters
    /// is at most about this (dimensionless).
    pub xtol: f64,
    /// Stop when the cosine of the angle between the residuals and every
    /// column of the Jacobian is at most this (dimensionless; 0 disables
    /// the test except at an exact fit).
    pub gtol: f64,
    /// Most residual evaluations (count).
    pub max_evaluations: u64,
    /// Most iterations, each one Jacobian evaluation (count).
    pub max_iterations: u64,
    /// Initial trust-region radius as a multiple of the scaled norm of the
    /// starting parameters (dimensionless; MINPACK's `factor`, 100 by
    /// default).
    pub step_bound: f64,
}

impl Default for SolveOptions {
    /// Tolerances a few units of rounding above `ε`.
    ///
    /// Near the minimum the sum of squares is flat to within its own
    /// rounding over a region about `√ε` standard errors wide, so no
    /// tolerance makes the parameters more accurate than that; these stop
    /// there, on a convergence test rather than on the machine-precision
    /// guard. Looser tolerances (MINPACK's `lmder1` uses `√ε` for `ftol`)
    /// stop visibly earlier on NIST's harder sets (ENSO loses a digit at
    /// `1e-13`), and the extra iterations cost little.
    fn default() -> Self {
        Self {
            ftol: 1e-15,
            xtol: 1e-15,
            gtol: 0.0,
            max_evaluations: 10_000,
            max_iterations: 5_000,
            step_bound: 100.0,
        }
    }
}

impl SolveOptions {
    /// Checks that every field is in range.
    ///
    /// # Errors
    ///
    /// [`FitError::InvalidOption`] naming the first bad field.
    pub fn validate(&self) -> Result<(), FitError> {
        for (name, value) in [
            ("ftol", self.ftol),
            ("xtol", self.xtol),
            ("gtol", self.gtol),
        ] {
            if !(value.is_finite() && value >= 0.0) {
                return Err(FitError::InvalidOption {
                    name,
                    requirement: "a finite number >= 0",
                    value,
                });
            }
        }
        if !(self.step_bound.is_finite() && self.step_bound > 0.0) {
            return Err(FitError::InvalidOption {
                name: "step_bound",
                requirement: "a finite number > 0",
                value: self.step_bound,
            });
        }
        if self.max_evaluations == 0 {
            return Err(FitError::InvalidOption {
                name: "max_evaluations",
                requirement: "at least 1",
                value: 0.0,
            });
        }
        Ok(())
    }
}

/// Why the solver stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[non_exhaustive]
pub enum Termination {
    /// The relative reduction of the sum of squares fell below `ftol`.
    Ftol,
    /// The relative change of the parameters fell below `xtol`.
    Xtol,
    /// Both the `ftol` and the `xtol` tests passed.
    FtolAndXtol,
    /// The residuals are orthogonal to the Jacobian's columns within
    /// `gtol` (always the case at an exact fit).
    Gtol,
    /// The tolerances asked for more than double precision can give; the
    /// solution is as good as working precision allows.
    MachinePrecision,
    /// The iteration budget ran out (a failure).
    MaxIterations,
    /// The residual-evaluation budget ran out (a failure).
    MaxEvaluations,
}

impl Termination {
    /// Whether this is a convergence test rather than a budget.
    pub fn is_converged(self) -> bool {
        !matches!(
            self,
            Termination::MaxIterations | Termination::MaxEvaluations
        )
    }
}

impl std::fmt::Display for Termination {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Termination::Ftol => "relative reduction of the sum of squares below ftol",
            Termination::Xtol => "relative change of the parameters below xtol",
            Termination::FtolAndXtol => "both ftol and xtol met",
            Termination::Gtol => "residuals orthogonal to the jacobian within gtol",
            Termination::MachinePrecision => "no further progress possible in double precision",
            Termination::MaxIterations => "iteration limit reached",
            Termination::MaxEvaluations => "residual evaluation limit reached",
        })
    }
}

/// Result of a converged nonlinear least-squares fit.
///
/// Units: each parameter has the unit the model gives it; variances and
/// covariances carry the squares and products of those units; sums of
/// squares have the unit of the squared (weighted) residual.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NonlinearFit {
    /// Fitted parameters (model units).
    pub parameters: Vec<f64>,
    /// Standard errors `√diag(s²·(JᵀJ)⁻¹)` (same unit as each parameter).
    pub standard_errors: Vec<f64>,
    /// Covariance `s²·(JᵀJ)⁻¹` at the solution, row-major (products of the
    /// parameters' units).
    pub covariance: Vec<Vec<f64>>,
    /// Residual sum of squares `Σ rᵢ²` (squared residual unit).
    pub residual_sum_of_squares: f64,
    /// Residual standard deviation `s = √(RSS / (m − n))` (residual unit).
    pub residual_standard_deviation: f64,
    /// Residual degrees of freedom `m − n` (count).
    pub degrees_of_freedom: usize,
    /// Number of residuals `m` (count).
    pub observations: usize,
    /// Solver iterations (count; one Jacobian evaluation each).
    pub iterations: u64,
    /// Residual evaluations, including the one at the start (count).
    pub residual_evaluations: u64,
    /// Jacobian evaluations, including the one at the solution for the
    /// covariance (count).
    pub jacobian_evaluations: u64,
    /// Which convergence test stopped the solver.
    pub termination: Termination,
    /// 1-norm condition number of the column-equilibrated Jacobian at the
    /// solution (dimensionless).
    pub condition_number: f64,
}

/// Fits `problem` from the starting parameters `p0`.
///
/// Runs [`LevenbergMarquardt`] under argmin's executor, then evaluates the
/// Jacobian once more at the solution for the covariance
/// `s²·(JᵀJ)⁻¹` with `s² = RSS/(m − n)` (Bates & Watts, *Nonlinear
/// Regression Analysis and Its Applications*, 1988, ch. 2). `(JᵀJ)⁻¹` comes
/// from a QR of the column-equilibrated `J` with refined columns, never from
/// inverting `JᵀJ`.
///
/// # Errors
///
/// [`FitError::TooFewPoints`] unless there are more residuals than
/// parameters; [`FitError::NonFiniteResiduals`] or
/// [`FitError::NonFiniteJacobian`] when the model breaks down;
/// [`FitError::NotConverged`] when a budget ran out first;
/// [`FitError::RankDeficient`] when the Jacobian at the solution does not
/// determine every parameter; [`FitError::InvalidOption`] for bad options.
pub fn solve<P: LeastSquaresProblem + ?Sized>(
    problem: &P,
    p0: DVector<f64>,
    options: &SolveOptions,
) -> Result<NonlinearFit, FitError> {
    let n = p0.len();
    let Minimised {
        parameters,
        termination,
        iterations,
        residual_evaluations,
        jacobian_evaluations,
    } = minimise(problem, p0, options)?;
    let residuals = problem.residuals(&parameters);
    let m = residuals.len();
    if residuals.iter().any(|v| !v.is_finite()) {
        return Err(FitError::NonFiniteResiduals {
            iteration: iterations,
        });
    }
    let jacobian = problem.jacobian(&parameters);
    if jacobian.shape() != (m, n) {
        return Err(FitError::ShapeMismatch {
            what: "jacobian",
            rows: jacobian.nrows(),
            columns: jacobian.ncols(),
            expected_rows: m,
            expected_columns: n,
        });
    }
    if jacobian.iter().any(|v| !v.is_finite()) {
        return Err(FitError::NonFiniteJacobian {
            iteration: iterations,
        });
    }

    let factor = Equilibrated::new(jacobian)?;
    let inverse_gram = factor.inverse_gram();
    let rss = residuals.norm_squared();
    let dof = m - n;
    let s2 = rss / dof as f64;
    let covariance: Vec<Vec<f64>> = (0..n)
        .map(|i| (0..n).map(|j| s2 * inverse_gram[(i, j)]).collect())
        .collect();
    let standard_errors = (0..n).map(|j| covariance[j][j].max(0.0).sqrt()).collect();

    Ok(NonlinearFit {
        parameters: parameters.iter().copied().collect(),
        standard_errors,
        covariance,
        residual_sum_of_squares: rss,
        residual_standard_deviation: s2.sqrt(),
        degrees_of_freedom: dof,
        observations: m,
        iterations,
        residual_evaluations: residual_evaluations + 1,
        jacobian_evaluations: jacobian_evaluations + 1,
        termination,
        condition_number: factor.condition_number(),
    })
}

/// Where [`LevenbergMarquardt`] stopped, as [`minimise`] returns it.
#[derive(Debug, Clone)]
pub(crate) struct Minimised {
    /// The parameters at the end (model units).
    pub parameters: DVector<f64>,
    /// The convergence test that stopped the solver.
    pub termination: Termination,
    /// Outer iterations (count).
    pub iterations: u64,
    /// Residual evaluations made by the solver (count).
    pub residual_evaluations: u64,
    /// Jacobian evaluations made by the solver (count).
    pub jacobian_evaluations: u64,
}

/// Runs [`LevenbergMarquardt`] under argmin's executor from `p0`: the machinery of [`solve`]
/// without the covariance at the end, for callers that compute it their own way (a model
/// whose residuals are presented to the solver in compressed form, say).
///
/// # Errors
///
/// As [`solve`], less the checks of the Jacobian at the solution.
pub(crate) fn minimise<P: LeastSquaresProblem + ?Sized>(
    problem: &P,
    p0: DVector<f64>,
    options: &SolveOptions,
) -> Result<Minimised, FitError> {
    let solver = LevenbergMarquardt::new(*options)?;
    let result = Executor::new(ArgminProblem::new(problem), solver)
        .configure(|state| {
            state
                .param(p0)
                .max_iters(options.max_iterations)
                .counting(true)
        })
        .run()
        .map_err(from_argmin)?;

    let state = result.state();
    let solver = result.solver();
    let counts = state.get_func_counts();
    let residual_evaluations = counts.get("operator_count").copied().unwrap_or(0);
    let jacobian_evaluations = counts.get("jacobian_count").copied().unwrap_or(0);
    let iterations = state.get_iter();

    let termination = match solver.termination() {
        Some(t) => t,
        None => match state.get_termination_reason() {
            Some(TerminationReason::MaxItersReached) => Termination::MaxIterations,
            other => {
                return Err(FitError::Framework {
                    message: format!("solver stopped for an unexpected reason: {other:?}"),
                });
            }
        },
    };
    if !termination.is_converged() {
        return Err(FitError::NotConverged {
            reason: termination,
            iterations,
            evaluations: residual_evaluations,
        });
    }

    let parameters = state
        .get_param()
        .cloned()
        .ok_or_else(|| FitError::Framework {
            message: "solver finished without parameters".to_owned(),
        })?;
    // The solver only ever accepts finite points, but a wrong model could
    // still step to an overflowing parameter; never report that as a fit.
    if let Some(row) = parameters.iter().position(|v| !v.is_finite()) {
        return Err(FitError::NonFiniteInput {
            what: "fitted parameters",
            row,
        });
    }
    Ok(Minimised {
        parameters,
        termination,
        iterations,
        residual_evaluations,
        jacobian_evaluations,
    })
}

/// Takes our own error back out of argmin's `anyhow` error, or flattens a
/// foreign one to text, so `anyhow` never appears in this crate's API.
fn from_argmin(error: argmin::core::Error) -> FitError {
    match error.downcast::<FitError>() {
        Ok(fit) => fit,
        Err(other) => FitError::Framework {
            message: format!("{other:#}"),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `y = a·exp(−k·t)` on fixed abscissae; used for the edge cases.
    struct Decay {
        t: Vec<f64>,
        y: Vec<f64>,
    }

    impl LeastSquaresProblem for Decay {
        fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
            DVector::from_iterator(
                self.t.len(),
                self.t
                    .iter()
                    .zip(&self.y)
                    .map(|(t, y)| y - p[0] * (-p[1] * t).exp()),
            )
        }
        fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
            DMatrix::from_fn(self.t.len(), 2, |i, j| {
                let e = (-p[1] * self.t[i]).exp();
                if j == 0 { -e } else { p[0] * self.t[i] * e }
            })
        }
    }

    fn decay() -> Decay {
        // Exact data from a = 3, k = 0.5, so the solution is known.
        let t: Vec<f64> = (0..20).map(|i| f64::from(i) * 0.25).collect();
        let y = t
            .iter()
            .map(|t| 3.0 * (-0.5 * t).exp() + 0.001 * (7.0 * t).sin())
            .collect();
        Decay { t, y }
    }

    #[test]
    fn recovers_a_decay() {
        let fit = solve(
            &decay(),
            DVector::from_vec(vec![1.0, 1.0]),
            &SolveOptions::default(),
        )
        .unwrap();
        assert!((fit.parameters[0] - 3.0).abs() < 2e-3, "{fit:?}");
        assert!((fit.parameters[1] - 0.5).abs() < 2e-3, "{fit:?}");
        assert!(fit.termination.is_converged());
        assert_eq!(fit.degrees_of_freedom, 18);
        assert!(fit.residual_evaluations >= fit.iterations);
        assert!(
            fit.standard_errors
                .iter()
                .all(|s| *s > 0.0 && s.is_finite())
        );
    }

    /// Residuals are NaN everywhere, which no solver can recover from.
    struct AlwaysNan;

    impl LeastSquaresProblem for AlwaysNan {
        fn residuals(&self, _p: &DVector<f64>) -> DVector<f64> {
            DVector::from_element(5, f64::NAN)
        }
        fn jacobian(&self, _p: &DVector<f64>) -> DMatrix<f64> {
            DMatrix::from_element(5, 1, 1.0)
        }
    }

    #[test]
    fn nan_residuals_at_the_start_are_an_error() {
        let err = solve(
            &AlwaysNan,
            DVector::from_vec(vec![1.0]),
            &SolveOptions::default(),
        )
        .unwrap_err();
        assert_eq!(err, FitError::NonFiniteResiduals { iteration: 0 });
        assert_eq!(
            err.to_string(),
            "residuals became non-finite at iteration 0"
        );
    }

    /// Finite only at p = 1 exactly: every step leaves the domain.
    struct Island;

    impl LeastSquaresProblem for Island {
        fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
            let v = if p[0] == 1.0 { 1.0 } else { f64::NAN };
            DVector::from_element(4, v)
        }
        fn jacobian(&self, _p: &DVector<f64>) -> DMatrix<f64> {
            DMatrix::from_element(4, 1, 1.0)
        }
    }

    #[test]
    fn a_collapse_onto_non_finite_steps_is_not_convergence() {
        let err = solve(
            &Island,
            DVector::from_vec(vec![1.0]),
            &SolveOptions::default(),
        )
        .unwrap_err();
        assert!(
            matches!(err, FitError::NonFiniteResiduals { .. }),
            "{err:?}"
        );
    }

    #[test]
    fn too_few_points_are_an_error() {
        let d = Decay {
            t: vec![0.0, 1.0],
            y: vec![1.0, 0.5],
        };
        let err = solve(
            &d,
            DVector::from_vec(vec![1.0, 1.0]),
            &SolveOptions::default(),
        )
        .unwrap_err();
        assert_eq!(
            err.to_string(),
            "too few points: 2 points for 2 parameters, need at least 3"
        );
    }

    /// `y = (a + b)·t`: only the sum is determined.
    struct Redundant;

    impl LeastSquaresProblem for Redundant {
        fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
            DVector::from_fn(6, |i, _| {
                let t = i as f64;
                2.0 * t + 0.01 * t.sin() - (p[0] + p[1]) * t
            })
        }
        fn jacobian(&self, _p: &DVector<f64>) -> DMatrix<f64> {
            DMatrix::from_fn(6, 2, |i, _| -(i as f64))
        }
    }

    #[test]
    fn rank_deficient_jacobian_is_an_error() {
        let err = solve(
            &Redundant,
            DVector::from_vec(vec![0.5, 0.5]),
            &SolveOptions::default(),
        )
        .unwrap_err();
        assert!(
            matches!(
                err,
                FitError::RankDeficient {
                    column: 1,
                    rank: 1,
                    parameters: 2,
                    ..
                }
            ),
            "{err:?}"
        );
    }

    #[test]
    fn budget_exhaustion_is_an_error() {
        let options = SolveOptions {
            max_evaluations: 2,
            ..SolveOptions::default()
        };
        let err = solve(&decay(), DVector::from_vec(vec![1.0, 1.0]), &options).unwrap_err();
        assert_eq!(
            err.to_string(),
            "no convergence: residual evaluation limit reached after 1 iterations and 2 residual evaluations"
        );
        let options = SolveOptions {
            max_iterations: 1,
            ..SolveOptions::default()
        };
        let err = solve(&decay(), DVector::from_vec(vec![1.0, 1.0]), &options).unwrap_err();
        assert!(
            matches!(
                err,
                FitError::NotConverged {
                    reason: Termination::MaxIterations,
                    iterations: 1,
                    ..
                }
            ),
            "{err:?}"
        );
    }

    #[test]
    fn fit_serializes_with_its_field_names() {
        let fit = solve(
            &decay(),
            DVector::from_vec(vec![1.0, 1.0]),
            &SolveOptions::default(),
        )
        .unwrap();
        let json = serde_json::to_value(&fit).unwrap();
        assert_eq!(json["parameters"].as_array().unwrap().len(), 2);
        assert_eq!(json["degrees_of_freedom"], 18);
        assert!(json["termination"].is_string());
        assert_eq!(json["covariance"].as_array().unwrap().len(), 2);
    }

    #[test]
    fn bad_options_are_refused() {
        let options = SolveOptions {
            ftol: -1.0,
            ..SolveOptions::default()
        };
        let err = solve(&decay(), DVector::from_vec(vec![1.0, 1.0]), &options).unwrap_err();
        assert_eq!(
            err.to_string(),
            "solver option ftol must be a finite number >= 0, got -1"
        );
    }

    #[test]
    fn argmin_gauss_newton_runs_on_the_adapter() {
        // argmin's own Gauss–Newton needs argmin-math's nalgebra 0.34
        // support for DVector/DMatrix; that it runs and lands on the same
        // minimum as our solver shows the pinned versions work together.
        use argmin::solver::gaussnewton::GaussNewton;
        let problem = decay();
        let ours = solve(
            &problem,
            DVector::from_vec(vec![2.5, 0.6]),
            &SolveOptions::default(),
        )
        .unwrap();
        let result = Executor::new(ArgminProblem::new(&problem), GaussNewton::<f64>::new())
            .configure(|s| s.param(DVector::from_vec(vec![2.5, 0.6])).max_iters(50))
            .run()
            .unwrap();
        let theirs = result.state().get_best_param().unwrap();
        for j in 0..2 {
            assert!((theirs[j] - ours.parameters[j]).abs() < 1e-9 * ours.parameters[j].abs());
        }
    }
}
