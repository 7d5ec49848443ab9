//! The fitting engine of Diffusor: from a [`diffusor_trace::Trace`] to a diffusion coefficient
//! with an uncertainty a reviewer can trust.
//!
//! - [`planar::analyze`] is the planar Cottrell analysis of one step: background, automatic
//!   charging and convection windows ([`window`]), the Cottrell line ([`regression`]) with the
//!   step onset refined, D or n·A·C with 95 % intervals and a GUM budget, diagnostics, window
//!   sensitivity and plain-language warnings. [`cell::Cell`] holds what the user entered.
//! - [`replicates::summarize`] compares several runs: mean, SD, RSD, t interval, weighted mean
//!   with the Birge ratio, Grubbs' outlier test.
//! - [`models`] holds the published current–time laws; [`analysis::analyze_model`] fits any of
//!   them to a step over the same windows and returns one [`analysis::ModelResult`] (the planar
//!   analysis included); [`constants`] CODATA 2018.
//!
//! Underneath is a least-squares engine:
//!
//! - [`linalg::lstsq`] fits a linear model `y ≈ X·β` with Householder QR
//!   and iterative refinement, and [`linalg::QrAccumulator`] does the same in
//!   constant memory for very long records, block by block and across
//!   threads. Both return a [`linalg::LinearFit`].
//! - [`solver::solve`] fits a nonlinear [`solver::LeastSquaresProblem`] by
//!   Moré's Levenberg–Marquardt ([`solver::LevenbergMarquardt`], an argmin
//!   solver) and returns a [`solver::NonlinearFit`].
//! - Every failure is a [`FitError`]; no result holds NaN parameters.
//!
//! Both are checked against the certified values of the NIST Statistical
//! Reference Datasets in `tests/`.
//!
//! # Example
//!
//! ```
//! use diffusor_fit::linalg::lstsq;
//! use diffusor_fit::solver::{solve, LeastSquaresProblem, SolveOptions};
//! use nalgebra::{DMatrix, DVector};
//!
//! // A straight line through (0, 1), (1, 3), (2, 5.1), (3, 6.9): by hand,
//! // slope = Sxy/Sxx = 9.9/5 = 1.98.
//! let design = DMatrix::from_row_slice(4, 2, &[1.0, 0.0, 1.0, 1.0, 1.0, 2.0, 1.0, 3.0]);
//! let y = DVector::from_vec(vec![1.0, 3.0, 5.1, 6.9]);
//! let line = lstsq(&design, &y, None)?;
//! assert!((line.coefficients[1] - 1.98).abs() < 1e-12);
//!
//! // The same data as a nonlinear problem in (intercept, slope).
//! struct Line(Vec<f64>, Vec<f64>);
//! impl LeastSquaresProblem for Line {
//!     fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
//!         DVector::from_fn(self.0.len(), |i, _| self.1[i] - p[0] - p[1] * self.0[i])
//!     }
//!     fn jacobian(&self, _p: &DVector<f64>) -> DMatrix<f64> {
//!         DMatrix::from_fn(self.0.len(), 2, |i, j| if j == 0 { -1.0 } else { -self.0[i] })
//!     }
//! }
//! let problem = Line(vec![0.0, 1.0, 2.0, 3.0], vec![1.0, 3.0, 5.1, 6.9]);
//! let fit = solve(&problem, DVector::from_vec(vec![0.0, 0.0]), &SolveOptions::default())?;
//! assert!((fit.parameters[1] - line.coefficients[1]).abs() < 1e-9);
//! assert!((fit.standard_errors[1] - line.standard_errors[1]).abs() < 1e-9);
//! # Ok::<(), diffusor_fit::FitError>(())
//! ```
#![deny(missing_docs)]

pub mod analysis;
pub mod cell;
pub mod constants;
pub mod error;
pub mod geometry;
mod lanes;
pub mod linalg;
pub mod models;
pub mod planar;
pub mod regression;
pub mod replicates;
pub mod solver;
pub mod special;
pub mod window;

pub use error::FitError;

/// A time in engineering notation for messages.
pub(crate) fn fmt_s(t: f64) -> String {
    diffusor_trace::format_si(t, "s", 3)
}
