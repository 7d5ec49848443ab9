//! What every model fit shares: the input transient, the error type, the result skeleton and
//! the step from a converged least-squares fit to honest intervals.
//!
//! The intervals follow the planar analysis: the residuals' autocorrelation sets a white plus
//! AR(1) noise model ([`NoiseModel::from_autocorrelation`]), the covariance is the sandwich
//! [`sandwich_covariance`] for that noise, and Student's t takes the effective number of points
//! less the parameters as its degrees of freedom.

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use crate::FitError;
use crate::planar::{AnalysisError, Estimate, Param};
use crate::regression::{NoiseModel, sandwich_covariance};
use crate::solver::{LeastSquaresProblem, NonlinearFit, SolveOptions, Termination, solve};

/// One potential-step transient: times after the step (s, positive, strictly increasing) and
/// the faradaic current (A, positive in the faradaic direction, background removed).
#[derive(Debug, Clone, Copy)]
pub struct Transient<'a> {
    /// Times after the step, in s.
    pub time_s: &'a [f64],
    /// Currents in A.
    pub current_a: &'a [f64],
}

impl Transient<'_> {
    /// Checks lengths, finiteness and that the times are positive and increasing.
    ///
    /// # Errors
    ///
    /// [`ModelError::Fit`] with [`FitError::DimensionMismatch`] or
    /// [`FitError::NonFiniteInput`], or [`ModelError::InvalidInput`] for times that do not
    /// increase.
    pub fn validate(&self, what: &'static str) -> Result<(), ModelError> {
        let n = self.time_s.len();
        if self.current_a.len() != n {
            return Err(FitError::DimensionMismatch {
                what: "current",
                found: self.current_a.len(),
                expected: n,
            }
            .into());
        }
        // One branch-free scan first: on valid data, the usual case, it is all that runs; the
        // scans below, which stop at the first offending row to name it, only when it fails.
        let mut ok = true;
        for (&y, &t) in self.current_a.iter().zip(self.time_s) {
            ok &= y.is_finite() & t.is_finite() & (t > 0.0);
        }
        for w in self.time_s.windows(2) {
            ok &= w[1] > w[0];
        }
        if ok {
            return Ok(());
        }
        if let Some(row) = (0..n).find(|&i| !self.current_a[i].is_finite()) {
            return Err(FitError::NonFiniteInput {
                what: "current",
                row,
            }
            .into());
        }
        if let Some(row) = (0..n).find(|&i| !(self.time_s[i].is_finite() && self.time_s[i] > 0.0)) {
            return Err(ModelError::InvalidInput {
                what,
                requirement: "times after the step that are finite and positive",
                value: self.time_s[row],
            });
        }
        if let Some(row) = (1..n).find(|&i| !(self.time_s[i] > self.time_s[i - 1])) {
            return Err(ModelError::InvalidInput {
                what,
                requirement: "strictly increasing times",
                value: self.time_s[row],
            });
        }
        Ok(())
    }

    /// The points with `lo ≤ t ≤ hi`, as a sub-transient.
    pub fn window(&self, lo_s: f64, hi_s: f64) -> Transient<'_> {
        let a = self.time_s.partition_point(|&t| t < lo_s);
        let b = self.time_s.partition_point(|&t| t <= hi_s).max(a);
        Transient {
            time_s: &self.time_s[a..b],
            current_a: &self.current_a[a..b],
        }
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.time_s.len()
    }

    /// Whether there are no points.
    pub fn is_empty(&self) -> bool {
        self.time_s.is_empty()
    }
}

/// Why a model could not be fitted.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ModelError {
    /// An input is outside the range the model is defined for.
    #[error("{what} must be {requirement}, got {value}")]
    InvalidInput {
        /// Which input.
        what: &'static str,
        /// What it must satisfy.
        requirement: &'static str,
        /// The value given.
        value: f64,
    },
    /// Too few points for the fit (or for one of its windows).
    #[error("{what}: {points} points, at least {needed} are needed")]
    TooFewPoints {
        /// Which fit or window.
        what: &'static str,
        /// Points available.
        points: usize,
        /// Points needed.
        needed: usize,
    },
    /// The data do not determine a parameter of the model.
    #[error("{0}")]
    NotIdentifiable(String),
    /// The numerical fit failed.
    #[error("the fit failed: {0}")]
    Fit(#[from] FitError),
    /// The chosen model needs an input that was not given.
    #[error("the {model} model needs {input}")]
    MissingInput {
        /// The model, as the command line names it.
        model: &'static str,
        /// What is missing, in words.
        input: &'static str,
    },
    /// The planar Cottrell analysis failed (the message is its own).
    #[error(transparent)]
    Analysis(#[from] AnalysisError),
    /// The automatic window (the planar analysis's rules) could not be set for another model.
    #[error("the automatic window could not be set ({0}); give both bounds of the window")]
    Window(AnalysisError),
}

/// Kinds of model warnings.
///
/// The planar analysis's [`crate::planar::WarningCode`] has no codes for a window outside a
/// model's validity or for a kinetic limitation, and that file belongs to the planar analysis,
/// so the models carry their own codes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum ModelWarningCode {
    /// Part of the data lies outside the range where the model's equation holds.
    OutsideValidity,
    /// A parameter is poorly determined by this window.
    PoorlyDetermined,
    /// The electron transfer is slow enough to lower the current at short times.
    KineticLimitation,
    /// A cross-check disagrees with the full fit by more than its uncertainty.
    CrossCheckDisagrees,
    /// A cross-check could not be computed.
    CrossCheckUnavailable,
    /// Residuals are structured or correlated.
    StructuredResiduals,
    /// The result rests on an assumption the user should confirm.
    Assumption,
}

/// A warning of a model fit, in plain language.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelWarning {
    /// What kind, for programs.
    pub code: ModelWarningCode,
    /// For people.
    pub message: String,
}

pub(crate) fn warning(code: ModelWarningCode, message: String) -> ModelWarning {
    ModelWarning { code, message }
}

/// The part of a model fit every model reports.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelFit {
    /// Model identifier.
    pub model: &'static str,
    /// The equation fitted.
    pub equation: &'static str,
    /// Its published source.
    pub source: &'static str,
    /// Where the equation holds.
    pub validity: &'static str,
    /// Whether every fitted point lies inside that range (judged with the fitted parameters).
    pub in_validity_range: bool,
    /// How the validity was judged, with the numbers.
    pub validity_check: String,
    /// Fitted (and derived) parameters with standard errors and 95 % intervals.
    pub params: Vec<Param>,
    /// Correlation matrix of the fitted parameters, in the order of the first entries of
    /// `params`.
    pub correlations: Vec<Vec<f64>>,
    /// Diffusion coefficient in m²/s, when the model gives one.
    pub diffusion_m2_s: Option<Estimate>,
    /// Solver iterations (count).
    pub iterations: u64,
    /// Whether a convergence test stopped the solver (always true in a returned fit).
    pub converged: bool,
    /// Which test stopped it.
    pub termination: Termination,
    /// Points in the fit (count).
    pub points: usize,
    /// Residual standard deviation in the unit of the fitted quantity (A or C).
    pub residual_sd: f64,
    /// The noise model used for the covariance.
    pub noise: NoiseModel,
    /// Degrees of freedom for Student's t (effective points less parameters, at least 1).
    pub degrees_of_freedom: f64,
    /// Warnings in plain language.
    pub warnings: Vec<ModelWarning>,
}

/// A value with its standard error and 95 % interval from Student's t.
pub(crate) fn estimate(value: f64, se: f64, dof: f64) -> Estimate {
    let t = crate::special::t975(dof);
    Estimate {
        value,
        std_error: se,
        ci95: [value - t * se, value + t * se],
    }
}

/// A named parameter.
pub(crate) fn param(
    name: &'static str,
    symbol: &'static str,
    unit: &'static str,
    estimate: Estimate,
) -> Param {
    Param {
        name,
        symbol,
        unit,
        estimate,
    }
}

/// Lags of the residual autocorrelation used for the noise model (as in the planar analysis).
pub(crate) const LAGS: usize = 10;

/// Autocorrelation ρ(1..=LAGS) of a residual series.
pub(crate) fn autocorrelation(r: &[f64]) -> Vec<f64> {
    let n = r.len();
    let mean = r.iter().sum::<f64>() / n.max(1) as f64;
    let c0: f64 = r.iter().map(|v| (v - mean).powi(2)).sum();
    (1..=LAGS.min(n.saturating_sub(1)))
        .map(|k| {
            if c0 > 0.0 {
                (0..n - k)
                    .map(|i| (r[i] - mean) * (r[i + k] - mean))
                    .sum::<f64>()
                    / c0
            } else {
                0.0
            }
        })
        .collect()
}

/// [`autocorrelation`] of residuals given in time order by an iterator, without storing them:
/// the lagged products are summed raw as the residuals pass (the last `LAGS` kept at hand),
/// then centred with the mean, using the first and last `LAGS` residuals for the ends of each
/// lag's range: `Σ(rᵢ − μ)(rᵢ₊ₖ − μ) = Σrᵢrᵢ₊ₖ − μ·(Σ_{i<n−k} rᵢ + Σ_{i≥k} rᵢ) + (n − k)·μ²`.
///
/// `K` is how many lags are summed, `LAGS` by default. With `K = 1` the sums are those of the
/// first lag of `LagSums<LAGS>` term for term and in the same order, so its ρ(1) is the same
/// number: [`noise_by_lags`] uses it to decide white noise without the other nine lags.
pub(crate) struct LagSums<const K: usize = LAGS> {
    n: usize,
    sum: f64,
    sum_sq: f64,
    lagged: [f64; K],
    first: [f64; LAGS],
    /// `recent[j]` is residual `n − 1 − j` (zero before the series starts).
    recent: [f64; LAGS],
}

impl<const K: usize> LagSums<K> {
    pub fn new() -> Self {
        Self {
            n: 0,
            sum: 0.0,
            sum_sq: 0.0,
            lagged: [0.0; K],
            first: [0.0; LAGS],
            recent: [0.0; LAGS],
        }
    }

    /// Adds the next residuals in order, the products inside the block summed four at a time.
    pub fn extend(&mut self, r: &[f64]) {
        let len = r.len();
        for k in 1..=K {
            // Products with the residuals before the block: r[i] pairs with residual
            // n + i − k, which is recent[k − 1 − i].
            for i in 0..k.min(len) {
                self.lagged[k - 1] += self.recent[k - 1 - i] * r[i];
            }
        }
        // Products inside the block from its point LAGS on (whatever K is): every lag in one
        // sweep, r[i] against r[i − k], four points at a time (independent running sums per lag
        // and lane).
        if len > LAGS {
            let mut acc = [[0.0f64; 4]; K];
            let body = &r[LAGS..];
            let chunks = body.len() / 4;
            // Lag k + 1 pairs the body with the same-length run k + 1 points earlier; each
            // four-point product is two plain (unaligned) loads.
            let lagged: [&[f64]; K] = std::array::from_fn(|k| &r[LAGS - k - 1..len - k - 1]);
            for (c, x) in body.as_chunks::<4>().0.iter().enumerate() {
                for (a, run) in acc.iter_mut().zip(&lagged) {
                    let Some(y) = run.get(4 * c..4 * c + 4) else {
                        unreachable!("every run is as long as the body")
                    };
                    for l in 0..4 {
                        a[l] += x[l] * y[l];
                    }
                }
            }
            for i in LAGS + 4 * chunks..len {
                for (k, a) in acc.iter_mut().enumerate() {
                    a[0] += r[i] * r[i - k - 1];
                }
            }
            for (k, a) in acc.iter().enumerate() {
                self.lagged[k] += (a[0] + a[1]) + (a[2] + a[3]);
            }
        }
        // The pairs inside the block whose later member lies in its first LAGS points.
        for i in 1..LAGS.min(len) {
            for k in 1..=i.min(K) {
                self.lagged[k - 1] += r[i] * r[i - k];
            }
        }
        for (i, &v) in r.iter().enumerate().take(LAGS.saturating_sub(self.n)) {
            self.first[self.n + i] = v;
        }
        if len >= LAGS {
            for j in 0..LAGS {
                self.recent[j] = r[len - 1 - j];
            }
        } else {
            self.recent.copy_within(0..LAGS - len, len);
            for j in 0..len {
                self.recent[j] = r[len - 1 - j];
            }
        }
        self.sum += sum4(r);
        self.sum_sq += dot4(r, r);
        self.n += len;
    }

    /// `Σr²` of the residuals added so far.
    pub fn sum_of_squares(&self) -> f64 {
        self.sum_sq
    }

    /// Appends the sums of the residuals that follow those of `self` (both at least `LAGS`
    /// long; `None` otherwise), adding the lagged products that straddle the join.
    pub fn join(mut self, next: &LagSums<K>) -> Option<LagSums<K>> {
        if self.n < LAGS || next.n < LAGS {
            return None;
        }
        for k in 1..=K {
            // Pairs (n₁ − k + j, n₁ + j) for j < k; residual n₁ − k + j is recent[k − 1 − j].
            for j in 0..k {
                self.lagged[k - 1] += self.recent[k - 1 - j] * next.first[j];
            }
            self.lagged[k - 1] += next.lagged[k - 1];
        }
        self.recent = next.recent;
        self.n += next.n;
        self.sum += next.sum;
        self.sum_sq += next.sum_sq;
        Some(self)
    }

    /// ρ(1..=K), as [`autocorrelation`] gives it.
    pub fn finish(&self) -> Vec<f64> {
        let n = self.n;
        let mean = self.sum / n.max(1) as f64;
        let c0 = (self.sum_sq - n as f64 * mean * mean).max(0.0);
        (1..=K.min(n.saturating_sub(1)))
            .map(|k| {
                if c0 > 0.0 {
                    let head: f64 = self.first[..k].iter().sum();
                    let tail: f64 = self.recent[..k].iter().sum();
                    let centred = self.lagged[k - 1] - mean * (2.0 * self.sum - head - tail)
                        + (n - k) as f64 * mean * mean;
                    centred / c0
                } else {
                    0.0
                }
            })
            .collect()
    }
}

/// The noise model of `m` residuals that `pass` streams in order into the lag sums it is given:
/// first the first lag only, and the other lags in a second pass only when ρ(1) exceeds the
/// significance limit of [`NoiseModel::from_autocorrelation`] (below it the model is white
/// whatever the later lags are, so the result is the same as from one pass of every lag).
/// Returns the residuals' sum of squares (from the first pass) and the model.
pub(crate) fn noise_by_lags(
    m: usize,
    first: impl FnOnce() -> LagSums<1>,
    all: impl FnOnce() -> LagSums,
) -> (f64, NoiseModel) {
    let lag1 = first();
    let rho1 = lag1.finish();
    let noise = if NoiseModel::from_autocorrelation(&rho1, m) == NoiseModel::WHITE {
        NoiseModel::WHITE
    } else {
        NoiseModel::from_autocorrelation(&all().finish(), m)
    };
    (lag1.sum_of_squares(), noise)
}

/// `Σ aᵢ` in four independent running sums.
fn sum4(a: &[f64]) -> f64 {
    let mut acc = [0.0f64; 4];
    let chunks = a.chunks_exact(4);
    let tail: f64 = chunks.remainder().iter().sum();
    for x in chunks {
        for l in 0..4 {
            acc[l] += x[l];
        }
    }
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// `Σ aᵢ·bᵢ` over the shorter length, in four independent running sums.
fn dot4(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0f64; 4];
    let (ac, bc) = (a.chunks_exact(4), b.chunks_exact(4));
    let tail: f64 = ac
        .remainder()
        .iter()
        .zip(bc.remainder())
        .map(|(x, y)| x * y)
        .sum();
    for (x, y) in ac.zip(bc) {
        for l in 0..4 {
            acc[l] += x[l] * y[l];
        }
    }
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// A converged fit with the sandwich covariance for the residuals' own noise model.
#[derive(Debug, Clone)]
pub(crate) struct Solved {
    pub fit: NonlinearFit,
    pub covariance: DMatrix<f64>,
    pub noise: NoiseModel,
    pub dof: f64,
}

impl Solved {
    pub fn value(&self, j: usize) -> f64 {
        self.fit.parameters[j]
    }

    pub fn se(&self, j: usize) -> f64 {
        self.covariance[(j, j)].max(0.0).sqrt()
    }

    pub fn estimate(&self, j: usize) -> Estimate {
        estimate(self.value(j), self.se(j), self.dof)
    }

    pub fn correlations(&self) -> Vec<Vec<f64>> {
        let n = self.covariance.nrows();
        (0..n)
            .map(|i| {
                (0..n)
                    .map(|j| {
                        let d = (self.covariance[(i, i)] * self.covariance[(j, j)]).sqrt();
                        if d > 0.0 {
                            self.covariance[(i, j)] / d
                        } else {
                            0.0
                        }
                    })
                    .collect()
            })
            .collect()
    }

    /// Warnings about the residuals: strong autocorrelation means structure the model misses
    /// (or correlated instrument noise), which the sandwich covariance allows for but which
    /// the user should see.
    pub fn residual_warnings(&self) -> Vec<ModelWarning> {
        let mut out = Vec::new();
        if self.noise.c * self.noise.phi > 0.5 {
            out.push(warning(
                ModelWarningCode::StructuredResiduals,
                format!(
                    "the residuals are strongly correlated (AR(1) share {:.2}, φ = {:.3}): either the model misses part of the transient or the noise is filtered; the intervals allow for the correlation ({:.0} effective of {} points)",
                    self.noise.c,
                    self.noise.phi,
                    self.dof + self.fit.parameters.len() as f64,
                    self.fit.observations
                ),
            ));
        }
        out
    }
}

/// Solves `problem` from `p0` and attaches the sandwich covariance for a white plus AR(1)
/// noise model estimated from the residuals.
pub(crate) fn solve_with_noise<P: LeastSquaresProblem + ?Sized>(
    problem: &P,
    p0: DVector<f64>,
) -> Result<Solved, FitError> {
    let fit = solve(problem, p0, &SolveOptions::default())?;
    let p = DVector::from_vec(fit.parameters.clone());
    let residuals = problem.residuals(&p);
    let m = residuals.len();
    let rho = autocorrelation(residuals.as_slice());
    let noise = NoiseModel::from_autocorrelation(&rho, m);
    let jacobian = problem.jacobian(&p);
    let s2 = fit.residual_sum_of_squares / fit.degrees_of_freedom as f64;
    let covariance = sandwich_covariance(&jacobian, s2, noise).ok_or(FitError::RankDeficient {
        column: 0,
        rank: 0,
        parameters: p.len(),
        condition_number: f64::INFINITY,
    })?;
    let dof = (noise.effective_points(m) - p.len() as f64).max(1.0);
    Ok(Solved {
        fit,
        covariance,
        noise,
        dof,
    })
}

/// Ordinary least squares of `y` on the columns of `x` (each a regressor), with the sandwich
/// covariance for the residuals' noise model: the closed-form estimates the cross-checks use.
pub(crate) fn linear_fit(columns: &[Vec<f64>], y: &[f64]) -> Result<Solved, FitError> {
    struct Linear<'a> {
        columns: &'a [Vec<f64>],
        y: &'a [f64],
    }
    impl LeastSquaresProblem for Linear<'_> {
        fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
            DVector::from_fn(self.y.len(), |i, _| {
                self.y[i]
                    - self
                        .columns
                        .iter()
                        .enumerate()
                        .map(|(j, c)| p[j] * c[i])
                        .sum::<f64>()
            })
        }
        fn jacobian(&self, _p: &DVector<f64>) -> DMatrix<f64> {
            DMatrix::from_fn(self.y.len(), self.columns.len(), |i, j| -self.columns[j][i])
        }
    }
    let x = DMatrix::from_fn(y.len(), columns.len(), |i, j| columns[j][i]);
    // A plain Householder solve is start enough: the solver polishes it, and the refined
    // `lstsq` costs more than the whole fit on long transients.
    let qr = x.qr();
    let qty = qr.q().transpose() * DVector::from_column_slice(y);
    let start = qr
        .r()
        .solve_upper_triangular(&qty)
        .ok_or(FitError::RankDeficient {
            column: 0,
            rank: 0,
            parameters: columns.len(),
            condition_number: f64::INFINITY,
        })?;
    // The Householder solution is the least-squares solution to rounding: no iterations are
    // needed (a Levenberg–Marquardt polish cost more than the whole disk fit on 10⁵ points).
    let problem = Linear { columns, y };
    let residuals = problem.residuals(&start);
    let m = y.len();
    let p = columns.len();
    if m <= p {
        return Err(FitError::TooFewPoints {
            points: m,
            parameters: p,
        });
    }
    let rss: f64 = residuals.iter().map(|r| r * r).sum();
    let dof = m - p;
    let s2 = rss / dof as f64;
    let jacobian = problem.jacobian(&start);
    let rank = || FitError::RankDeficient {
        column: 0,
        rank: 0,
        parameters: p,
        condition_number: f64::INFINITY,
    };
    let normal = jacobian.transpose() * &jacobian;
    let plain = normal.clone().try_inverse().ok_or_else(rank)? * s2;
    let noise = NoiseModel::from_autocorrelation(&autocorrelation(residuals.as_slice()), m);
    let covariance = sandwich_covariance(&jacobian, s2, noise).ok_or_else(rank)?;
    Ok(closed_form(
        start.iter().copied().collect(),
        &normal,
        &plain,
        covariance,
        rss,
        m,
        noise,
    ))
}

/// A closed-form least-squares solution as a [`Solved`]: the estimates, the normal matrix
/// XᵀX (for the condition number), the plain covariance s²·(XᵀX)⁻¹, the sandwich
/// `covariance`, the residual sum of squares of `m` points and the residuals' noise model.
fn closed_form(
    parameters: Vec<f64>,
    normal: &DMatrix<f64>,
    plain: &DMatrix<f64>,
    covariance: DMatrix<f64>,
    rss: f64,
    m: usize,
    noise: NoiseModel,
) -> Solved {
    let p = parameters.len();
    let dof = m - p;
    // The 2-norm condition number of the column-equilibrated design, from the eigenvalues of
    // its normal matrix scaled to unit diagonal.
    let scale = DVector::from_fn(p, |j, _| 1.0 / normal[(j, j)].sqrt());
    let scaled = DMatrix::from_fn(p, p, |i, j| normal[(i, j)] * scale[i] * scale[j]);
    let eig = scaled.symmetric_eigen().eigenvalues;
    let condition_number = (eig.max() / eig.min()).sqrt();
    let fit = NonlinearFit {
        parameters,
        standard_errors: (0..p).map(|j| plain[(j, j)].max(0.0).sqrt()).collect(),
        covariance: (0..p)
            .map(|i| (0..p).map(|j| plain[(i, j)]).collect())
            .collect(),
        residual_sum_of_squares: rss,
        residual_standard_deviation: (rss / dof as f64).sqrt(),
        degrees_of_freedom: dof,
        observations: m,
        iterations: 0,
        residual_evaluations: 1,
        jacobian_evaluations: 1,
        // At the least-squares solution the residuals are orthogonal to the columns.
        termination: Termination::Gtol,
        condition_number,
    };
    Solved {
        fit,
        covariance,
        noise,
        dof: (noise.effective_points(m) - p as f64).max(1.0),
    }
}

/// [`linear_fit`] for a design given row by row, whose first column is the constant 1: the
/// same estimates, plain and sandwich covariances, noise model and condition number, in a few
/// streaming passes instead of a Householder QR of a stored m × p matrix (which cost more than
/// the whole disk fit on 10⁵ points). The slopes come from the normal equations of the
/// columns centred on their exact means, which for the short, well-conditioned designs of the
/// cross-checks (two or three columns) keep the digits a QR would.
pub(crate) fn linear_fit_rows<const P: usize>(
    y: &[f64],
    row: impl Fn(usize) -> [f64; P],
) -> Result<Solved, FitError> {
    let m = y.len();
    if m <= P {
        return Err(FitError::TooFewPoints {
            points: m,
            parameters: P,
        });
    }
    let rank = || FitError::RankDeficient {
        column: 0,
        rank: 0,
        parameters: P,
        condition_number: f64::INFINITY,
    };
    // Means of the columns and of y.
    let mut mean = [0.0; P];
    let mut mean_y = 0.0;
    for (i, &yi) in y.iter().enumerate() {
        let x = row(i);
        for j in 1..P {
            mean[j] += x[j];
        }
        mean_y += yi;
    }
    for v in &mut mean {
        *v /= m as f64;
    }
    mean[0] = 1.0;
    mean_y /= m as f64;
    // Centred cross products, and the raw XᵀX for the covariances.
    let mut cxx = [[0.0; P]; P];
    let mut cxy = [0.0; P];
    let mut raw = [[0.0; P]; P];
    for (i, &yi) in y.iter().enumerate() {
        let x = row(i);
        let dy = yi - mean_y;
        for a in 1..P {
            let da = x[a] - mean[a];
            cxy[a] += da * dy;
            for b in 1..P {
                cxx[a][b] += da * (x[b] - mean[b]);
            }
        }
        for a in 0..P {
            for b in 0..P {
                raw[a][b] += x[a] * x[b];
            }
        }
    }
    let q = P - 1;
    let centred = DMatrix::from_fn(q, q, |a, b| cxx[a + 1][b + 1]);
    let rhs = DVector::from_fn(q, |a, _| cxy[a + 1]);
    let slopes = centred.cholesky().ok_or_else(rank)?.solve(&rhs);
    let mut beta = [0.0; P];
    beta[0] = mean_y;
    for j in 1..P {
        beta[j] = slopes[j - 1];
        beta[0] -= slopes[j - 1] * mean[j];
    }
    // The residuals streamed into lag sums (the lags past the first only when the first shows
    // correlation, in a second pass).
    fn residual_lags<const K: usize, const P: usize>(
        y: &[f64],
        row: impl Fn(usize) -> [f64; P],
        beta: &[f64; P],
    ) -> LagSums<K> {
        let m = y.len();
        let mut lags = LagSums::new();
        let mut buf = [0.0f64; 256];
        for start in (0..m).step_by(buf.len()) {
            let block = &mut buf[..(m - start).min(256)];
            for (j, r) in block.iter_mut().enumerate() {
                let x = row(start + j);
                *r = y[start + j] - (0..P).map(|c| beta[c] * x[c]).sum::<f64>();
            }
            lags.extend(block);
        }
        lags
    }
    let (rss, noise) = noise_by_lags(
        m,
        || residual_lags(y, &row, &beta),
        || residual_lags(y, &row, &beta),
    );
    let dof = m - P;
    let s2 = rss / dof as f64;
    let normal = DMatrix::from_fn(P, P, |a, b| raw[a][b]);
    let inv = normal.clone().try_inverse().ok_or_else(rank)?;
    let plain = &inv * s2;
    // The sandwich of `regression::sandwich_covariance` with the rows made on the fly (the
    // Jacobian is −X; the sign cancels in every product).
    let mut middle = &normal * (1.0 - noise.c);
    if noise.c > 0.0 && noise.phi > 0.0 {
        let phi = noise.phi;
        let mut h = [0.0; P];
        let mut prev = [0.0; P];
        let mut acc = [[0.0; P]; P];
        for i in 0..m {
            let z = row(i);
            if i > 0 {
                for c in 0..P {
                    h[c] = phi * (h[c] + prev[c]);
                }
            }
            for r in 0..P {
                for c in 0..P {
                    acc[r][c] += z[r] * z[c] + z[r] * h[c] + h[r] * z[c];
                }
            }
            prev = z;
        }
        middle += DMatrix::from_fn(P, P, |a, b| acc[a][b]) * noise.c;
    }
    let covariance = &inv * middle * &inv * s2;
    Ok(closed_form(
        beta.to_vec(),
        &normal,
        &plain,
        covariance,
        rss,
        m,
        noise,
    ))
}

/// Checks that `value` is positive and finite.
pub(crate) fn positive(what: &'static str, value: f64) -> Result<f64, ModelError> {
    if value > 0.0 && value.is_finite() {
        Ok(value)
    } else {
        Err(ModelError::InvalidInput {
            what,
            requirement: "a positive finite number",
            value,
        })
    }
}

/// The value of `x` (on a grid of `ln x` from `lo` to `hi` in `steps`) that minimises `cost`:
/// a robust start for a parameter that enters nonlinearly.
pub(crate) fn log_grid_min(lo: f64, hi: f64, steps: usize, cost: impl Fn(f64) -> f64) -> f64 {
    let (a, b) = (lo.ln(), hi.ln());
    let mut best = (f64::INFINITY, lo);
    for k in 0..=steps {
        let x = (a + (b - a) * k as f64 / steps as f64).exp();
        let c = cost(x);
        if c < best.0 {
            best = (c, x);
        }
    }
    best.1
}

/// What is known besides the geometry: the fit determines the product `n·C`, and the known
/// factor turns it into the other.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "value")]
pub enum Known {
    /// `n` is known (electrons per molecule); C is reported.
    Electrons(f64),
    /// `C` is known (mol/m³); n is reported.
    Concentration(f64),
}

impl Known {
    pub(crate) fn validate(self) -> Result<(), ModelError> {
        match self {
            Known::Electrons(n) => positive("n", n).map(|_| ()),
            Known::Concentration(c) => positive("concentration", c).map(|_| ()),
        }
    }

    /// The parameter derived from `n·C` (mol/m³) with its standard error.
    pub(crate) fn derived(self, nc: Estimate) -> Param {
        let (k, name, symbol, unit) = match self {
            Known::Electrons(n) => (n, "bulk concentration", "C", "mol/m³"),
            Known::Concentration(c) => (c, "electrons per molecule", "n", "1"),
        };
        Param {
            name,
            symbol,
            unit,
            estimate: Estimate {
                value: nc.value / k,
                std_error: nc.std_error / k,
                ci95: [nc.ci95[0] / k, nc.ci95[1] / k],
            },
        }
    }
}

/// A model `I = K·g(D, t)` with `K = n·C` (mol/m³) entering linearly and `D` (m²/s)
/// nonlinearly; `shape(D, t)` returns `(g, ∂g/∂D)` in A·m³/mol and A·m³·s/(mol·m²).
/// Parameters `[D, K]`.
pub(crate) struct ScaledByNc<'a, G: Fn(f64, f64) -> (f64, f64)> {
    pub data: Transient<'a>,
    pub shape: G,
}

impl<G: Fn(f64, f64) -> (f64, f64)> LeastSquaresProblem for ScaledByNc<'_, G> {
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
        let (d, k) = (p[0], p[1]);
        DVector::from_fn(self.data.len(), |i, _| {
            if d > 0.0 {
                self.data.current_a[i] - k * (self.shape)(d, self.data.time_s[i]).0
            } else {
                f64::NAN
            }
        })
    }

    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
        let (d, k) = (p[0], p[1]);
        let mut j = DMatrix::zeros(self.data.len(), 2);
        for i in 0..self.data.len() {
            let (g, dg) = (self.shape)(d, self.data.time_s[i]);
            j[(i, 0)] = -k * dg;
            j[(i, 1)] = -g;
        }
        j
    }
}
/// The least-squares scale `k` of `model` against `y` (`y ≈ k·model`) and the residual sum of
/// squares it leaves.
pub(crate) fn best_scale(model: &[f64], y: &[f64]) -> (f64, f64) {
    let mm: f64 = model.iter().map(|m| m * m).sum();
    let my: f64 = model.iter().zip(y).map(|(m, y)| m * y).sum();
    if !(mm > 0.0) {
        return (0.0, f64::INFINITY);
    }
    let k = my / mm;
    let rss = model
        .iter()
        .zip(y)
        .map(|(m, y)| (y - k * m).powi(2))
        .sum::<f64>();
    (k, rss)
}

impl<G: Fn(f64, f64) -> (f64, f64)> ScaledByNc<'_, G> {
    /// Starting values: the best `D` on a log grid from 1e-14 to 1e-6 m²/s (40 per decade),
    /// each with its least-squares `K`, on about 500 evenly strided points (a start needs no
    /// more, and 320 grid values on every point of a long transient cost more than the fit);
    /// then Levenberg–Marquardt from there on all points.
    pub fn solve(&self) -> Result<Solved, FitError> {
        let stride = (self.data.len() / 500).max(1);
        let (t_sub, y_sub): (Vec<f64>, Vec<f64>) = self
            .data
            .time_s
            .iter()
            .zip(self.data.current_a)
            .step_by(stride)
            .map(|(t, y)| (*t, *y))
            .unzip();
        let fit_k = |d: f64| {
            let g: Vec<f64> = t_sub.iter().map(|&t| (self.shape)(d, t).0).collect();
            best_scale(&g, &y_sub)
        };
        let d0 = log_grid_min(1e-14, 1e-6, 320, |d| fit_k(d).1);
        let k0 = fit_k(d0).0;
        self.solve_two([d0, k0])
    }

    /// One pass over the data at `[d, k]`: the residual sum of squares and, with `normal`,
    /// JᵀJ (as `[a11, a12, a22]`) and Jᵀr. `None` where the model is undefined.
    fn pass(&self, d: f64, k: f64, normal: bool) -> Option<(f64, [f64; 3], [f64; 2])> {
        if !(d > 0.0) {
            return None;
        }
        let (mut rss, mut a, mut b) = (0.0, [0.0; 3], [0.0; 2]);
        for (&t, &y) in self.data.time_s.iter().zip(self.data.current_a) {
            let (g, dg) = (self.shape)(d, t);
            let r = y - k * g;
            rss += r * r;
            if normal {
                let (j0, j1) = (-k * dg, -g);
                a[0] += j0 * j0;
                a[1] += j0 * j1;
                a[2] += j1 * j1;
                b[0] += j0 * r;
                b[1] += j1 * r;
            }
        }
        (rss.is_finite() && a.iter().chain(&b).all(|v| v.is_finite())).then_some((rss, a, b))
    }

    /// Levenberg–Marquardt for the two parameters with JᵀJ and Jᵀr accumulated in one pass
    /// over the data (no m × 2 Jacobian is stored), steps from the Marquardt-scaled normal
    /// equations (D. W. Marquardt, J. SIAM 11 (1963) 431), and the same tolerances and
    /// covariance as [`solve_with_noise`]: s²·(JᵀJ)⁻¹ for the fit, the sandwich for white plus
    /// AR(1) noise for the intervals. Two parameters keep the 2 × 2 normal equations well
    /// within double precision once the columns are scaled to unit diagonal.
    fn solve_two(&self, p0: [f64; 2]) -> Result<Solved, FitError> {
        let m = self.data.len();
        if m <= 2 {
            return Err(FitError::TooFewPoints {
                points: m,
                parameters: 2,
            });
        }
        let opts = SolveOptions::default();
        let undefined = || FitError::RankDeficient {
            column: 0,
            rank: 0,
            parameters: 2,
            condition_number: f64::INFINITY,
        };
        let mut p = p0;
        let (mut rss, mut a, mut b) = self.pass(p[0], p[1], true).ok_or_else(undefined)?;
        let mut lambda = 1e-3;
        let mut iterations = 0u64;
        let mut evaluations = 1u64;
        let mut jacobians = 1u64;
        let termination = loop {
            if iterations >= opts.max_iterations {
                break Termination::MaxIterations;
            }
            iterations += 1;
            // Scale to unit diagonal, then damp the diagonal.
            let (s0, s1) = (a[0].sqrt(), a[2].sqrt());
            if !(s0 > 0.0 && s1 > 0.0) {
                return Err(undefined());
            }
            let c = a[1] / (s0 * s1);
            let (g0, g1) = (-b[0] / s0, -b[1] / s1);
            let mut accepted = None;
            while lambda < 1e20 {
                let (d0, d1) = (1.0 + lambda, 1.0 + lambda);
                let det = d0 * d1 - c * c;
                if !(det > 0.0) {
                    lambda *= 10.0;
                    continue;
                }
                let step = [(d1 * g0 - c * g1) / det / s0, (d0 * g1 - c * g0) / det / s1];
                let trial = [p[0] + step[0], p[1] + step[1]];
                // The trial pass accumulates the normal equations too: the shape costs the same
                // with its derivative, and an accepted step then needs no second pass.
                evaluations += 1;
                jacobians += 1;
                match self.pass(trial[0], trial[1], true) {
                    Some(next) if next.0 <= rss => {
                        accepted = Some((trial, step, next));
                        break;
                    }
                    _ => lambda *= 10.0,
                }
            }
            let Some((trial, step, next)) = accepted else {
                break Termination::MachinePrecision;
            };
            lambda = (lambda / 10.0).max(1e-15);
            let f_ok = rss - next.0 <= opts.ftol * rss;
            let x_ok = (0..2).all(|j| step[j].abs() <= opts.xtol * (p[j].abs() + opts.xtol));
            p = trial;
            (rss, a, b) = next;
            match (f_ok, x_ok) {
                (true, true) => break Termination::FtolAndXtol,
                (true, false) => break Termination::Ftol,
                (false, true) => break Termination::Xtol,
                (false, false) => {}
            }
        };
        if !termination.is_converged() {
            return Err(FitError::NotConverged {
                reason: termination,
                iterations,
                evaluations,
            });
        }
        let TwoByTwo {
            inv,
            dof,
            s2,
            cov,
            c,
        } = TwoByTwo::of(a, rss, m).ok_or_else(undefined)?;
        let fit = NonlinearFit {
            parameters: p.to_vec(),
            standard_errors: vec![cov[0][0].sqrt(), cov[1][1].sqrt()],
            covariance: cov.iter().map(|r| r.to_vec()).collect(),
            residual_sum_of_squares: rss,
            residual_standard_deviation: s2.sqrt(),
            degrees_of_freedom: dof,
            observations: m,
            iterations,
            residual_evaluations: evaluations,
            jacobian_evaluations: jacobians,
            termination,
            condition_number: ((1.0 + c) / (1.0 - c)).sqrt(),
        };
        // The residuals once more, for their autocorrelation, and the sandwich with the rows
        // of J made on the fly: the recursion of `regression::sandwich_covariance`.
        let (d, k) = (p[0], p[1]);
        let mut residuals = Vec::with_capacity(m);
        for (&t, &y) in self.data.time_s.iter().zip(self.data.current_a) {
            residuals.push(y - k * (self.shape)(d, t).0);
        }
        let noise = NoiseModel::from_autocorrelation(&autocorrelation(&residuals), m);
        let covariance = two_parameter_sandwich(
            a,
            inv,
            s2,
            noise,
            self.data.time_s,
            |t| {
                let (g, dg) = (self.shape)(d, t);
                [-k * dg, -g]
            },
            || {},
        );
        Ok(Solved {
            fit,
            covariance,
            noise,
            dof: (noise.effective_points(m) - 2.0).max(1.0),
        })
    }
}

/// The plain statistics of a two-parameter fit from its packed JᵀJ `a = [a₀₀, a₀₁, a₁₁]`, the
/// residual sum of squares and the number of points.
pub(crate) struct TwoByTwo {
    /// (JᵀJ)⁻¹, packed as `a`.
    pub inv: [f64; 3],
    /// Degrees of freedom, m − 2.
    pub dof: usize,
    /// The residual variance.
    pub s2: f64,
    /// The plain covariance s²·(JᵀJ)⁻¹.
    pub cov: [[f64; 2]; 2],
    /// |correlation| of the columns: the 2-norm condition number of the column-equilibrated
    /// Jacobian is √((1 + c)/(1 − c)), the scaled normal matrix [[1, c], [c, 1]] having the
    /// eigenvalues 1 ± c.
    pub c: f64,
}

impl TwoByTwo {
    /// `None` when JᵀJ is not positive definite.
    pub(crate) fn of(a: [f64; 3], rss: f64, m: usize) -> Option<TwoByTwo> {
        let det = a[0] * a[2] - a[1] * a[1];
        if !(det > 0.0) {
            return None;
        }
        let inv = [a[2] / det, -a[1] / det, a[0] / det];
        let dof = m - 2;
        let s2 = rss / dof as f64;
        Some(TwoByTwo {
            inv,
            dof,
            s2,
            cov: [[s2 * inv[0], s2 * inv[1]], [s2 * inv[1], s2 * inv[2]]],
            c: (a[1] / (a[0] * a[2]).sqrt()).abs(),
        })
    }
}

/// The sandwich covariance of a two-parameter fit whose Jacobian rows are `z = (−K·g′, −g)`
/// at the times `at`: `a` = the packed JᵀJ `[a₀₀, a₀₁, a₁₁]`, `inv` its inverse, `s2` the
/// residual variance. Under the AR(1) `noise`, the middle Σᵢ Σⱼ zᵢ zⱼᵀ φ^|i−j| is summed by
/// the recursion of `regression::sandwich_covariance` with the rows made on the fly (one more
/// pass over `at`, only for correlated residuals); `pass` is called when it runs.
pub(crate) fn two_parameter_sandwich(
    a: [f64; 3],
    inv: [f64; 3],
    s2: f64,
    noise: NoiseModel,
    at: &[f64],
    row: impl Fn(f64) -> [f64; 2],
    pass: impl FnOnce(),
) -> DMatrix<f64> {
    let mut middle = [
        a[0] * (1.0 - noise.c),
        a[1] * (1.0 - noise.c),
        a[2] * (1.0 - noise.c),
    ];
    if noise.c > 0.0 && noise.phi > 0.0 {
        pass();
        let phi = noise.phi;
        let (mut h, mut prev) = ([0.0f64; 2], [0.0f64; 2]);
        let mut acc = [0.0f64; 3];
        // The rows of a block first (a plain map, which the compiler vectorises), then the
        // recursion through them in order.
        let (mut z0, mut z1) = ([0.0f64; 256], [0.0f64; 256]);
        for (b, xs) in at.chunks(256).enumerate() {
            let n = xs.len();
            for ((z0, z1), &x) in z0[..n].iter_mut().zip(&mut z1[..n]).zip(xs) {
                [*z0, *z1] = row(x);
            }
            for (j, (&a, &b1)) in z0[..n].iter().zip(&z1[..n]).enumerate() {
                let z = [a, b1];
                if b > 0 || j > 0 {
                    h = [phi * (h[0] + prev[0]), phi * (h[1] + prev[1])];
                }
                acc[0] += z[0] * z[0] + 2.0 * z[0] * h[0];
                acc[1] += z[0] * z[1] + z[0] * h[1] + h[0] * z[1];
                acc[2] += z[1] * z[1] + 2.0 * z[1] * h[1];
                prev = z;
            }
        }
        for j in 0..3 {
            middle[j] += noise.c * acc[j];
        }
    }
    // inv·middle·inv·s², all symmetric 2 × 2.
    let mul = |x: [f64; 3], y: [f64; 3]| {
        [
            [x[0] * y[0] + x[1] * y[1], x[0] * y[1] + x[1] * y[2]],
            [x[1] * y[0] + x[2] * y[1], x[1] * y[1] + x[2] * y[2]],
        ]
    };
    let im = mul(inv, middle);
    let sandwich = [
        im[0][0] * inv[0] + im[0][1] * inv[1],
        im[0][0] * inv[1] + im[0][1] * inv[2],
        im[1][0] * inv[1] + im[1][1] * inv[2],
    ];
    DMatrix::from_row_slice(
        2,
        2,
        &[
            sandwich[0] * s2,
            sandwich[1] * s2,
            sandwich[1] * s2,
            sandwich[2] * s2,
        ],
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn series(n: usize, seed: u64) -> Vec<f64> {
        // A deterministic AR(1)-like series with an offset, so the mean matters.
        let mut state = seed | 1;
        let mut prev = 0.0;
        (0..n)
            .map(|_| {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                let u = (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
                prev = 0.6 * prev + u;
                prev + 0.3
            })
            .collect()
    }

    #[test]
    fn streamed_lag_sums_match_the_direct_autocorrelation() {
        // Reference: the direct definition in `autocorrelation`.
        for n in [1, 2, 5, 10, 11, 37, 1000] {
            let r = series(n, n as u64);
            let mut lags = LagSums::<LAGS>::new();
            for &v in &r {
                lags.extend(std::slice::from_ref(&v));
            }
            let (a, b) = (autocorrelation(&r), lags.finish());
            assert_eq!(a.len(), b.len(), "n = {n}");
            for (x, y) in a.iter().zip(&b) {
                assert!((x - y).abs() < 1e-12, "n = {n}: {x} vs {y}");
            }
        }
    }

    #[test]
    fn block_lag_sums_match_one_at_a_time() {
        let r = series(1000, 11);
        for block in [1, 3, 10, 17, 256] {
            let mut lags = LagSums::<LAGS>::new();
            r.chunks(block).for_each(|c| lags.extend(c));
            for (x, y) in autocorrelation(&r).iter().zip(&lags.finish()) {
                assert!((x - y).abs() < 1e-12, "block {block}: {x} vs {y}");
            }
            let direct: f64 = r.iter().map(|v| v * v).sum();
            assert!((lags.sum_of_squares() / direct - 1.0).abs() < 1e-13);
        }
    }

    #[test]
    fn the_first_lag_alone_is_the_first_lag_of_all() {
        // ρ(1) from the one-lag sums must be the same number as from the ten-lag sums, block
        // by block and joined, so that `noise_by_lags` decides white noise as one pass would.
        for (n, block) in [(1000, 256), (1003, 256), (37, 5), (25, 1)] {
            let r = series(n, 5);
            let (mut one, mut all) = (LagSums::<1>::new(), LagSums::<LAGS>::new());
            r.chunks(block).for_each(|c| {
                one.extend(c);
                all.extend(c);
            });
            assert_eq!(
                one.finish()[0].to_bits(),
                all.finish()[0].to_bits(),
                "n = {n}"
            );
            assert_eq!(
                one.sum_of_squares().to_bits(),
                all.sum_of_squares().to_bits()
            );
            let (mut a1, mut b1) = (LagSums::<1>::new(), LagSums::<1>::new());
            let (mut a, mut b) = (LagSums::<LAGS>::new(), LagSums::<LAGS>::new());
            let split = n / 2;
            a1.extend(&r[..split]);
            b1.extend(&r[split..]);
            a.extend(&r[..split]);
            b.extend(&r[split..]);
            let (j1, j) = (a1.join(&b1).expect("long"), a.join(&b).expect("long"));
            assert_eq!(j1.finish()[0].to_bits(), j.finish()[0].to_bits(), "n = {n}");
        }
    }

    #[test]
    fn noise_by_lags_is_the_noise_of_every_lag() {
        // Reference: `NoiseModel::from_autocorrelation` of all ten lags in one pass. White
        // series must not take the second pass; AR(1) series must, and give the same model.
        for phi in [0.0, 0.3, 0.9] {
            let mut state = 0x9e37_79b9_7f4a_7c15_u64;
            let mut e = 0.0;
            let r: Vec<f64> = (0..5000)
                .map(|_| {
                    state ^= state << 13;
                    state ^= state >> 7;
                    state ^= state << 17;
                    e = phi * e + (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
                    e
                })
                .collect();
            let fill = <LagSums<LAGS>>::new;
            let mut all = fill();
            all.extend(&r);
            let expected = NoiseModel::from_autocorrelation(&all.finish(), r.len());
            let second = std::cell::Cell::new(false);
            let (rss, noise) = noise_by_lags(
                r.len(),
                || {
                    let mut one = LagSums::<1>::new();
                    one.extend(&r);
                    one
                },
                || {
                    second.set(true);
                    let mut all = fill();
                    all.extend(&r);
                    all
                },
            );
            assert_eq!(noise, expected, "phi = {phi}");
            assert_eq!(second.get(), phi > 0.0, "phi = {phi}");
            assert_eq!(rss.to_bits(), all.sum_of_squares().to_bits());
        }
    }

    #[test]
    fn joined_lag_sums_match_one_pass() {
        let r = series(1000, 7);
        for split in [10, 11, 500, 990] {
            let (mut a, mut b) = (LagSums::<LAGS>::new(), LagSums::<LAGS>::new());
            a.extend(&r[..split]);
            b.extend(&r[split..]);
            let joined = a.join(&b).expect("both parts are long enough").finish();
            for (x, y) in autocorrelation(&r).iter().zip(&joined) {
                assert!((x - y).abs() < 1e-12, "split {split}: {x} vs {y}");
            }
        }
        let (mut a, b) = (LagSums::<LAGS>::new(), LagSums::<LAGS>::new());
        a.extend(&[1.0]);
        assert!(a.join(&b).is_none());
    }

    #[test]
    fn streamed_line_matches_the_householder_line() {
        // Reference: `linear_fit` (Householder QR) on the same design, I = a + b·t^-½ + c·t^½.
        let t: Vec<f64> = (1..=2000).map(|k| k as f64 * 1e-3).collect();
        let noise = series(t.len(), 3);
        let y: Vec<f64> = t
            .iter()
            .zip(&noise)
            .map(|(t, e)| 2.0 + 0.5 / t.sqrt() - 0.1 * t.sqrt() + 0.01 * e)
            .collect();
        let columns = vec![
            vec![1.0; t.len()],
            t.iter().map(|t| 1.0 / t.sqrt()).collect(),
            t.iter().map(|t| t.sqrt()).collect(),
        ];
        let qr = linear_fit(&columns, &y).expect("qr line");
        let streamed =
            linear_fit_rows(&y, |i| [1.0, columns[1][i], columns[2][i]]).expect("streamed line");
        for j in 0..3 {
            assert!((qr.value(j) / streamed.value(j) - 1.0).abs() < 1e-10, "{j}");
            assert!((qr.se(j) / streamed.se(j) - 1.0).abs() < 1e-8, "{j}");
        }
        assert!((qr.noise.c - streamed.noise.c).abs() < 1e-10);
        assert!((qr.noise.phi - streamed.noise.phi).abs() < 1e-10);
        assert!((qr.fit.condition_number / streamed.fit.condition_number - 1.0).abs() < 1e-8);
    }
}
