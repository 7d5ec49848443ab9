//! The one error type of the fitting crate.

use crate::solver::Termination;

/// Everything that can stop a fit from giving a trustworthy answer.
///
/// A fit that returns `Ok` has finite parameters, a full-rank model at the
/// solution and a finished convergence test; anything short of that is one of
/// these variants, so that no caller ever has to check for NaN itself.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FitError {
    /// There are not more observations than parameters, so no residual
    /// degrees of freedom remain to estimate the noise from.
    #[error(
        "too few points: {points} points for {parameters} parameters, need at least {}",
        parameters + 1
    )]
    TooFewPoints {
        /// Number of observations supplied.
        points: usize,
        /// Number of parameters in the model.
        parameters: usize,
    },

    /// The model has no parameters at all.
    #[error("the model has no parameters")]
    NoParameters,

    /// Two inputs that must describe the same observations differ in length.
    #[error("{what} has {found} entries but {expected} were expected")]
    DimensionMismatch {
        /// Which input is the wrong size.
        what: &'static str,
        /// Its size.
        found: usize,
        /// The size it should have.
        expected: usize,
    },

    /// An input value is NaN or infinite.
    #[error("non-finite value in {what} at row {row}")]
    NonFiniteInput {
        /// Which input holds the value.
        what: &'static str,
        /// Zero-based row (observation or parameter index) of the value.
        row: usize,
    },

    /// A weight is zero, negative or not finite.
    #[error("weight {weight} at row {row} is not a positive finite number")]
    InvalidWeight {
        /// Zero-based observation index.
        row: usize,
        /// The offending weight.
        weight: f64,
    },

    /// The design (or the Jacobian at the solution) does not have full
    /// column rank, so some parameter is not determined by the data.
    #[error(
        "rank-deficient model: column {column} is a linear combination of the others \
         (numerical rank {rank} of {parameters}, condition number {condition_number:.3e})"
    )]
    RankDeficient {
        /// Zero-based column (parameter) first found to be dependent.
        column: usize,
        /// Numerical rank found.
        rank: usize,
        /// Number of columns (parameters).
        parameters: usize,
        /// Estimated condition number of the column-equilibrated matrix
        /// (dimensionless; infinite when a column is exactly dependent).
        condition_number: f64,
    },

    /// Two accumulators for different numbers of parameters were merged, or
    /// a row of the wrong width was pushed.
    #[error("accumulator for {expected} parameters cannot take {found}")]
    ParameterCountMismatch {
        /// Parameters the accumulator was made for.
        expected: usize,
        /// Parameters offered.
        found: usize,
    },

    /// The residuals became NaN or infinite and the solver could not step
    /// back into the region where the model is defined.
    #[error("residuals became non-finite at iteration {iteration}")]
    NonFiniteResiduals {
        /// Solver iteration (0 = at the starting point).
        iteration: u64,
    },

    /// The Jacobian became NaN or infinite.
    #[error("jacobian became non-finite at iteration {iteration}")]
    NonFiniteJacobian {
        /// Solver iteration (0 = at the starting point).
        iteration: u64,
    },

    /// The problem's residual vector or Jacobian changed shape between calls.
    #[error("{what} is {rows}x{columns} but {expected_rows}x{expected_columns} was expected")]
    ShapeMismatch {
        /// Which output has the wrong shape.
        what: &'static str,
        /// Rows returned.
        rows: usize,
        /// Columns returned.
        columns: usize,
        /// Rows expected.
        expected_rows: usize,
        /// Columns expected.
        expected_columns: usize,
    },

    /// A solver option is out of its valid range.
    #[error("solver option {name} must be {requirement}, got {value}")]
    InvalidOption {
        /// Name of the option field.
        name: &'static str,
        /// What the value must satisfy.
        requirement: &'static str,
        /// The value given.
        value: f64,
    },

    /// The solver stopped on a budget before any convergence test passed.
    #[error(
        "no convergence: {reason} after {iterations} iterations and {evaluations} residual evaluations"
    )]
    NotConverged {
        /// Why the solver stopped.
        reason: Termination,
        /// Iterations done.
        iterations: u64,
        /// Residual evaluations done.
        evaluations: u64,
    },

    /// The optimisation framework reported an error of its own.
    #[error("solver framework error: {message}")]
    Framework {
        /// The framework's message, flattened to text so that its error
        /// type stays out of this crate's API.
        message: String,
    },

    /// A replicate summary was asked of fewer runs than it needs.
    #[error("too few runs: {runs} given, at least {needed} needed")]
    TooFewRuns {
        /// Runs supplied.
        runs: usize,
        /// Runs the statistic needs.
        needed: usize,
    },

    /// A run's estimate is NaN or infinite, so it cannot enter a replicate
    /// summary.
    #[error("run {index} `{label}` has non-finite value {value}")]
    NonFiniteRunValue {
        /// Zero-based position of the run in the input.
        index: usize,
        /// The run's label.
        label: String,
        /// The offending value.
        value: f64,
    },

    /// A replicate statistic overflowed double precision although every
    /// input was finite (values or standard errors near the limits of `f64`).
    #[error("the {what} of the runs is not finite in double precision")]
    NonFiniteStatistic {
        /// Which statistic overflowed.
        what: &'static str,
    },

    /// A significance level is not strictly between 0 and 1.
    #[error("significance level {alpha} must lie strictly between 0 and 1")]
    InvalidSignificance {
        /// The level given.
        alpha: f64,
    },

    /// A probability distribution refused its parameters. The replicate code
    /// only builds distributions with at least one degree of freedom, so this
    /// would mean a bug, not bad input.
    #[error("distribution rejected its parameters: {message}")]
    Distribution {
        /// The distribution's message.
        message: String,
    },
}
