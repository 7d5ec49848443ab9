//! Levenberg–Marquardt in Moré's trust-region formulation, as an argmin
//! [`Solver`].
//!
//! The algorithm and every constant in it follow J. J. Moré, "The
//! Levenberg–Marquardt algorithm: implementation and theory", in G. A.
//! Watson (ed.), *Numerical Analysis*, Lecture Notes in Mathematics 630,
//! Springer, 1978, pp. 105–116, and the accompanying description of the
//! MINPACK routines (Moré, Garbow & Hillstrom, *User Guide for MINPACK-1*,
//! Argonne report ANL-80-74, 1980, chapter 2); the comments below name the
//! part of the paper each step comes from.

use argmin::core::{
    Error, IterState, Jacobian, KV, Operator, Problem, Solver, State, TerminationReason,
    TerminationStatus,
};
use nalgebra::{DMatrix, DVector};

use super::{SolveOptions, Termination};
use crate::error::FitError;

/// State carried by argmin between iterations: parameters only. Residuals
/// and Jacobians stay inside the solver so that a fit with millions of
/// points does not copy them into the state on every step.
pub type LmState = IterState<DVector<f64>, (), (), (), (), f64>;

/// Moré's Levenberg–Marquardt solver.
///
/// One argmin iteration is one *outer* iteration of Moré's algorithm: a
/// Jacobian evaluation and QR factorisation at the current point, then as
/// many trial steps (residual evaluations) as it takes to find one that
/// reduces the sum of squares, or to meet a stopping test. The state's cost
/// is the residual sum of squares `‖r‖²`.
///
/// Use it through [`solve`](super::solve), or drive it with argmin's
/// [`Executor`](argmin::core::Executor) directly (for example to attach an
/// observer) on any problem that implements argmin's [`Operator`] (the
/// residual vector) and [`Jacobian`]; [`ArgminProblem`](super::ArgminProblem)
/// adapts a [`LeastSquaresProblem`](super::LeastSquaresProblem).
#[derive(Debug, Clone)]
pub struct LevenbergMarquardt {
    options: SolveOptions,
    work: Option<Work>,
    termination: Option<Termination>,
    evaluations: u64,
    last_trial_non_finite: bool,
}

/// Everything Moré's algorithm keeps from one outer iteration to the next.
#[derive(Debug, Clone)]
struct Work {
    /// Residuals at the current point.
    fvec: DVector<f64>,
    /// `‖fvec‖`.
    fnorm: f64,
    /// Diagonal scaling `D` (Moré's implicit scaling: the largest column norm of `J` seen so far).
    diag: DVector<f64>,
    /// Trust-region radius Δ.
    delta: f64,
    /// Levenberg–Marquardt parameter λ of the last step.
    par: f64,
    /// `‖D·x‖`.
    xnorm: f64,
    /// Whether the scaling and radius are still to be set from the first
    /// Jacobian.
    first: bool,
}

impl LevenbergMarquardt {
    /// A solver with the given tolerances and budgets.
    ///
    /// # Errors
    ///
    /// [`FitError::InvalidOption`] when a tolerance is negative or not
    /// finite, or the step bound is not positive.
    pub fn new(options: SolveOptions) -> Result<Self, FitError> {
        options.validate()?;
        Ok(Self {
            options,
            work: None,
            termination: None,
            evaluations: 0,
            last_trial_non_finite: false,
        })
    }

    /// Why the solver stopped, once it has stopped on a test of its own
    /// (`None` while running, or when argmin stopped it, for example on its
    /// iteration limit).
    pub fn termination(&self) -> Option<Termination> {
        self.termination
    }

    /// Residual evaluations made, including the one at the starting point.
    pub fn evaluations(&self) -> u64 {
        self.evaluations
    }

    /// Records why the solver must stop; argmin learns it from
    /// [`Solver::terminate`] before the next iteration.
    fn stop(&mut self, reason: Termination, state: LmState) -> LmState {
        self.termination = Some(reason);
        state
    }
}

impl<O> Solver<O, LmState> for LevenbergMarquardt
where
    O: Operator<Param = DVector<f64>, Output = DVector<f64>>
        + Jacobian<Param = DVector<f64>, Jacobian = DMatrix<f64>>,
{
    fn name(&self) -> &'static str {
        "Levenberg-Marquardt (More 1978)"
    }

    fn init(
        &mut self,
        problem: &mut Problem<O>,
        mut state: LmState,
    ) -> Result<(LmState, Option<KV>), Error> {
        let x = state.take_param().ok_or_else(|| FitError::Framework {
            message: "no starting parameters were given".to_owned(),
        })?;
        if x.is_empty() {
            return Err(FitError::NoParameters.into());
        }
        if let Some(row) = x.iter().position(|v| !v.is_finite()) {
            return Err(FitError::NonFiniteInput {
                what: "starting parameters",
                row,
            }
            .into());
        }
        let fvec = problem.apply(&x)?;
        self.evaluations = 1;
        if fvec.len() <= x.len() {
            return Err(FitError::TooFewPoints {
                points: fvec.len(),
                parameters: x.len(),
            }
            .into());
        }
        if fvec.iter().any(|v| !v.is_finite()) {
            return Err(FitError::NonFiniteResiduals { iteration: 0 }.into());
        }
        let fnorm = enorm(fvec.as_slice());
        let n = x.len();
        self.work = Some(Work {
            fvec,
            fnorm,
            diag: DVector::from_element(n, 1.0),
            delta: 0.0,
            par: 0.0,
            xnorm: 0.0,
            first: true,
        });
        self.termination = None;
        self.last_trial_non_finite = false;
        Ok((state.param(x).cost(fnorm * fnorm), None))
    }

    fn next_iter(
        &mut self,
        problem: &mut Problem<O>,
        mut state: LmState,
    ) -> Result<(LmState, Option<KV>), Error> {
        const P1: f64 = 0.1;
        const P5: f64 = 0.5;
        const P25: f64 = 0.25;
        const P75: f64 = 0.75;
        const P0001: f64 = 1.0e-4;
        let epsmch = f64::EPSILON;

        let iteration = state.get_iter() + 1;
        let options = self.options;
        let mut x = state.take_param().ok_or_else(|| FitError::Framework {
            message: "the solver state lost its parameters".to_owned(),
        })?;
        let Some(work) = self.work.as_mut() else {
            return Err(FitError::Framework {
                message: "next_iter was called before init".to_owned(),
            }
            .into());
        };
        let m = work.fvec.len();
        let n = x.len();

        let mut fjac = problem.jacobian(&x)?;
        if fjac.shape() != (m, n) {
            return Err(FitError::ShapeMismatch {
                what: "jacobian",
                rows: fjac.nrows(),
                columns: fjac.ncols(),
                expected_rows: m,
                expected_columns: n,
            }
            .into());
        }
        if fjac.iter().any(|v| !v.is_finite()) {
            return Err(FitError::NonFiniteJacobian { iteration }.into());
        }

        // QR with column pivoting, J·P = Q·R, shared by every trial step.
        let qr = qrfac(&mut fjac);

        // On the first iteration, scale by the column norms and set the
        // initial radius to `factor·‖D·x₀‖`, as Moré's algorithm does.
        if work.first {
            for j in 0..n {
                work.diag[j] = if qr.acnorm[j] == 0.0 {
                    1.0
                } else {
                    qr.acnorm[j]
                };
            }
            work.xnorm = enorm_scaled(&work.diag, &x);
            work.delta = options.step_bound * work.xnorm;
            if work.delta == 0.0 {
                work.delta = options.step_bound;
            }
            work.first = false;
        }

        // Qᵀ·f, the first n entries of which enter every step.
        let qtf = qr.q_transpose_times(&fjac, &work.fvec);
        let r = qr.upper_triangle(&fjac);

        // Scaled gradient norm: the largest cosine between f and a column of
        // J (MINPACK's gtol test).
        let mut gnorm: f64 = 0.0;
        if work.fnorm != 0.0 {
            for j in 0..n {
                let l = qr.ipvt[j];
                if qr.acnorm[l] != 0.0 {
                    let sum: f64 = (0..=j).map(|i| r[(i, j)] * (qtf[i] / work.fnorm)).sum();
                    gnorm = gnorm.max((sum / qr.acnorm[l]).abs());
                }
            }
        }
        if gnorm <= options.gtol {
            let cost = work.fnorm * work.fnorm;
            state = state.param(x).cost(cost);
            return Ok((self.stop(Termination::Gtol, state), None));
        }

        // Keep D non-decreasing, so the trust region cannot be rescaled
        // into a region already rejected (Moré's scaling rule).
        for j in 0..n {
            work.diag[j] = work.diag[j].max(qr.acnorm[j]);
        }

        let mut r_work = r.clone();
        loop {
            // Step p minimising ‖J·p + f‖ subject to ‖D·p‖ ≤ Δ.
            let lm = lmpar(
                &mut r_work,
                &r,
                &qr.ipvt,
                &work.diag,
                &qtf,
                work.delta,
                work.par,
            );
            work.par = lm.par;
            let step = -lm.x;
            let trial = &x + &step;
            let pnorm = enorm_scaled(&work.diag, &step);

            // On the first iteration, adjust the initial step bound.
            if iteration == 1 {
                work.delta = work.delta.min(pnorm);
            }

            let ftrial = problem.apply(&trial)?;
            self.evaluations += 1;
            if ftrial.len() != m {
                return Err(FitError::ShapeMismatch {
                    what: "residual vector",
                    rows: ftrial.len(),
                    columns: 1,
                    expected_rows: m,
                    expected_columns: 1,
                }
                .into());
            }
            // A trial point where the model is undefined is a failed step:
            // an infinite norm makes the reduction ratio negative, so the
            // radius shrinks just as for any bad step.
            let finite = ftrial.iter().all(|v| v.is_finite());
            self.last_trial_non_finite = !finite;
            let fnorm1 = if finite {
                enorm(ftrial.as_slice())
            } else {
                f64::INFINITY
            };

            // Actual relative reduction 1 − (‖f(x+p)‖/‖f(x)‖)².
            let actred = if P1 * fnorm1 < work.fnorm {
                1.0 - (fnorm1 / work.fnorm).powi(2)
            } else {
                -1.0
            };

            // Predicted reduction and directional derivative, from ‖J·p‖
            // and λ‖D·p‖², written so that nothing can overflow (Moré's
            // step-bound update).
            let mut jp = DVector::zeros(n);
            for j in 0..n {
                let pj = step[qr.ipvt[j]];
                for i in 0..=j {
                    jp[i] += r[(i, j)] * pj;
                }
            }
            let temp1 = enorm(jp.as_slice()) / work.fnorm;
            let temp2 = work.par.sqrt() * pnorm / work.fnorm;
            let prered = temp1 * temp1 + temp2 * temp2 / P5;
            let dirder = -(temp1 * temp1 + temp2 * temp2);

            let ratio = if prered == 0.0 { 0.0 } else { actred / prered };

            // Radius update from the ratio of actual to predicted reduction.
            if ratio <= P25 {
                let mut temp = if actred >= 0.0 {
                    P5
                } else {
                    P5 * dirder / (dirder + P5 * actred)
                };
                if P1 * fnorm1 >= work.fnorm || temp < P1 {
                    temp = P1;
                }
                work.delta = temp * work.delta.min(pnorm / P1);
                work.par /= temp;
            } else if work.par == 0.0 || ratio >= P75 {
                work.delta = pnorm / P5;
                work.par *= P5;
            }

            let successful = ratio >= P0001;
            if successful {
                x = trial;
                work.fvec = ftrial;
                work.fnorm = fnorm1;
                work.xnorm = enorm_scaled(&work.diag, &x);
            }

            // Convergence tests, in MINPACK's order.
            let ftol_met =
                actred.abs() <= options.ftol && prered <= options.ftol && P5 * ratio <= 1.0;
            let xtol_met = work.delta <= options.xtol * work.xnorm;
            let reason = if ftol_met && xtol_met {
                Some(Termination::FtolAndXtol)
            } else if ftol_met {
                Some(Termination::Ftol)
            } else if xtol_met {
                Some(Termination::Xtol)
            } else if (actred.abs() <= epsmch && prered <= epsmch && P5 * ratio <= 1.0)
                || work.delta <= epsmch * work.xnorm
                || gnorm <= epsmch
            {
                // The tolerances asked for more than the working precision
                // can give: no further progress is possible. This outranks
                // the budget test, as in MINPACK.
                Some(Termination::MachinePrecision)
            } else if self.evaluations >= options.max_evaluations {
                Some(Termination::MaxEvaluations)
            } else {
                None
            };

            if let Some(reason) = reason {
                if reason.is_converged() && self.last_trial_non_finite && !successful {
                    // The radius collapsed only because every step left the
                    // model's domain; that is not convergence.
                    return Err(FitError::NonFiniteResiduals { iteration }.into());
                }
                let cost = work.fnorm * work.fnorm;
                state = state.param(x).cost(cost);
                return Ok((self.stop(reason, state), None));
            }
            if successful {
                let cost = work.fnorm * work.fnorm;
                return Ok((state.param(x).cost(cost), None));
            }
        }
    }

    /// The stopping tests run inside [`next_iter`](Solver::next_iter),
    /// because Moré's tests look at every trial step, accepted or not; this
    /// hands their verdict to argmin's executor.
    fn terminate(&mut self, _state: &LmState) -> TerminationStatus {
        match self.termination {
            None => TerminationStatus::NotTerminated,
            Some(reason) if reason.is_converged() => {
                TerminationStatus::Terminated(TerminationReason::SolverConverged)
            }
            Some(reason) => {
                TerminationStatus::Terminated(TerminationReason::SolverExit(reason.to_string()))
            }
        }
    }
}

/// Output of [`qrfac`]: the permutation, `|rⱼⱼ|` with signs, and the
/// column norms of the original matrix.
#[derive(Debug, Clone)]
pub(crate) struct PivotedQr {
    /// `ipvt[j]` is the original column now in position `j`.
    pub ipvt: Vec<usize>,
    /// Diagonal of `R`.
    pub rdiag: DVector<f64>,
    /// Euclidean norms of the columns of the original matrix.
    pub acnorm: DVector<f64>,
}

impl PivotedQr {
    /// `Qᵀ·f` (first `n` entries), from the Householder vectors left in
    /// the lower trapezoid of `a` by [`qrfac`].
    pub fn q_transpose_times(&self, a: &DMatrix<f64>, f: &DVector<f64>) -> DVector<f64> {
        let (m, n) = a.shape();
        let mut wa = f.clone();
        for j in 0..n.min(m) {
            let ajj = a[(j, j)];
            if ajj != 0.0 {
                let col = a.column(j);
                let sum: f64 = (j..m).map(|i| col[i] * wa[i]).sum();
                let temp = -sum / ajj;
                for i in j..m {
                    wa[i] += col[i] * temp;
                }
            }
        }
        wa.rows(0, n).into_owned()
    }

    /// The `n × n` upper-triangular `R`, from the strict upper triangle left
    /// in `a` and the saved diagonal.
    pub fn upper_triangle(&self, a: &DMatrix<f64>) -> DMatrix<f64> {
        let n = a.ncols();
        DMatrix::from_fn(n, n, |i, j| match i.cmp(&j) {
            std::cmp::Ordering::Less => a[(i, j)],
            std::cmp::Ordering::Equal => self.rdiag[j],
            std::cmp::Ordering::Greater => 0.0,
        })
    }
}

/// Householder QR with column pivoting, `A·P = Q·R`, in place.
///
/// Pivoting picks the remaining column of largest norm (Businger & Golub,
/// "Linear least squares solutions by Householder transformations", Numer.
/// Math. 7, 1965), with the column norms down-dated as in MINPACK's `qrfac`
/// and recomputed when cancellation makes the down-date unreliable. On
/// return the lower trapezoid of `a` holds the Householder vectors (scaled
/// so that their first entry is `a[(j, j)]`), the strict upper triangle holds
/// that of `R`, and the diagonal of `R` is in `rdiag`.
pub(crate) fn qrfac(a: &mut DMatrix<f64>) -> PivotedQr {
    let (m, n) = a.shape();
    let epsmch = f64::EPSILON;
    let acnorm = DVector::from_fn(n, |j, _| enorm(a.column(j).as_slice()));
    let mut rdiag = acnorm.clone();
    let mut wa = acnorm.clone();
    let mut ipvt: Vec<usize> = (0..n).collect();

    for j in 0..m.min(n) {
        // Bring the column of largest remaining norm into position j.
        let mut kmax = j;
        for k in j..n {
            if rdiag[k] > rdiag[kmax] {
                kmax = k;
            }
        }
        if kmax != j {
            a.swap_columns(j, kmax);
            rdiag[kmax] = rdiag[j];
            wa[kmax] = wa[j];
            ipvt.swap(j, kmax);
        }

        // Householder reflection that zeroes a[j+1.., j].
        let mut ajnorm = enorm(&a.column(j).as_slice()[j..]);
        if ajnorm != 0.0 {
            if a[(j, j)] < 0.0 {
                ajnorm = -ajnorm;
            }
            for i in j..m {
                a[(i, j)] /= ajnorm;
            }
            a[(j, j)] += 1.0;

            // Apply it to the remaining columns and down-date their norms.
            for k in (j + 1)..n {
                let sum: f64 = (j..m).map(|i| a[(i, j)] * a[(i, k)]).sum();
                let temp = sum / a[(j, j)];
                for i in j..m {
                    let aij = a[(i, j)];
                    a[(i, k)] -= temp * aij;
                }
                if rdiag[k] != 0.0 {
                    let t = a[(j, k)] / rdiag[k];
                    rdiag[k] *= (1.0 - t * t).max(0.0).sqrt();
                    if 0.05 * (rdiag[k] / wa[k]).powi(2) <= epsmch {
                        rdiag[k] = enorm(&a.column(k).as_slice()[(j + 1)..]);
                        wa[k] = rdiag[k];
                    }
                }
            }
        }
        rdiag[j] = -ajnorm;
    }
    PivotedQr {
        ipvt,
        rdiag,
        acnorm,
    }
}

/// Result of [`lmpar`].
struct LmStep {
    par: f64,
    /// Solution of `J·x ≈ f`, `√λ·D·x ≈ 0`; the step is `−x`.
    x: DVector<f64>,
}

/// The Levenberg–Marquardt parameter λ for radius Δ (Moré 1978, the
/// section on the Levenberg–Marquardt parameter, after M. D. Hebden, "An
/// algorithm for minimization using exact second derivatives", Harwell
/// report TP 515, 1973).
///
/// λ is zero if the Gauss–Newton step already lies within the trust region
/// (within 10 %); otherwise it is found by the safeguarded Newton iteration
/// on `φ(λ) = ‖D·x(λ)‖ − Δ`, which keeps λ inside bounds `[l, u]` built
/// from the Gauss–Newton step and the scaled gradient, and stops once
/// `|φ(λ)| ≤ 0.1·Δ` or after ten iterations.
/// Each `x(λ)` comes from [`qrsolv`], a QR of `[J; √λ·D]` built from the
/// existing `R` by Givens rotations; the normal equations are never formed.
///
/// `r_work` is scratch space of the same size as `r`: its strict lower
/// triangle receives the factor `S` of the last `qrsolv`.
fn lmpar(
    r_work: &mut DMatrix<f64>,
    r: &DMatrix<f64>,
    ipvt: &[usize],
    diag: &DVector<f64>,
    qtb: &DVector<f64>,
    delta: f64,
    par_in: f64,
) -> LmStep {
    const P1: f64 = 0.1;
    const P001: f64 = 0.001;
    let dwarf = f64::MIN_POSITIVE;
    let n = r.ncols();

    // Gauss–Newton direction; if R is singular, a least-squares solution
    // with the trailing components set to zero.
    let mut nsing = n;
    let mut wa1 = qtb.clone();
    for j in 0..n {
        if r[(j, j)] == 0.0 && nsing == n {
            nsing = j;
        }
        if nsing < n {
            wa1[j] = 0.0;
        }
    }
    for k in (0..nsing).rev() {
        wa1[k] /= r[(k, k)];
        let temp = wa1[k];
        for i in 0..k {
            wa1[i] -= r[(i, k)] * temp;
        }
    }
    let mut x = DVector::zeros(n);
    for j in 0..n {
        x[ipvt[j]] = wa1[j];
    }

    let mut wa2 = x.component_mul(diag);
    let mut dxnorm = enorm(wa2.as_slice());
    let mut fp = dxnorm - delta;
    if fp <= P1 * delta {
        return LmStep { par: 0.0, x };
    }

    // Lower bound l: the Newton iterate for φ from λ = 0; zero when J is
    // rank-deficient.
    let mut parl = 0.0;
    if nsing >= n {
        for j in 0..n {
            let l = ipvt[j];
            wa1[j] = diag[l] * (wa2[l] / dxnorm);
        }
        for j in 0..n {
            let sum: f64 = (0..j).map(|i| r[(i, j)] * wa1[i]).sum();
            wa1[j] = (wa1[j] - sum) / r[(j, j)];
        }
        let temp = enorm(wa1.as_slice());
        parl = ((fp / delta) / temp) / temp;
    }

    // Upper bound u = ‖(J·D⁻¹)ᵀf‖ / Δ.
    for j in 0..n {
        let sum: f64 = (0..=j).map(|i| r[(i, j)] * qtb[i]).sum();
        wa1[j] = sum / diag[ipvt[j]];
    }
    let gnorm = enorm(wa1.as_slice());
    let mut paru = gnorm / delta;
    if paru == 0.0 {
        paru = dwarf / delta.min(P1);
    }

    let mut par = par_in.max(parl).min(paru);
    if par == 0.0 {
        par = gnorm / dxnorm;
    }

    let mut sdiag = DVector::zeros(n);
    let mut iter = 0;
    loop {
        iter += 1;
        if par == 0.0 {
            par = dwarf.max(P001 * paru);
        }
        let sqrt_par = par.sqrt();
        let scaled_diag = diag * sqrt_par;
        qrsolv(r_work, r, ipvt, &scaled_diag, qtb, &mut x, &mut sdiag);
        wa2 = x.component_mul(diag);
        dxnorm = enorm(wa2.as_slice());
        let previous_fp = fp;
        fp = dxnorm - delta;

        // Accept λ once ‖D·x‖ is within 10 % of Δ, or when the lower bound is
        // zero and φ has stopped decreasing from a negative value, or after
        // ten tries, as in the paper.
        if fp.abs() <= P1 * delta
            || (parl == 0.0 && fp <= previous_fp && previous_fp < 0.0)
            || iter == 10
        {
            break;
        }

        // Newton correction (φ/φ')·(‖D·x‖/Δ), from the factor S of
        // [J; √λ·D], the update of Hebden's method.
        for j in 0..n {
            let l = ipvt[j];
            wa1[j] = diag[l] * (wa2[l] / dxnorm);
        }
        for j in 0..n {
            wa1[j] /= sdiag[j];
            let temp = wa1[j];
            for i in (j + 1)..n {
                wa1[i] -= r_work[(i, j)] * temp;
            }
        }
        let temp = enorm(wa1.as_slice());
        let parc = ((fp / delta) / temp) / temp;

        if fp > 0.0 {
            parl = parl.max(par);
        }
        if fp < 0.0 {
            paru = paru.min(par);
        }
        par = parl.max(par + parc);
    }
    LmStep { par, x }
}

/// Solves `min ‖[R·Pᵀ; D]·x − [Qᵀb; 0]‖` given the pivoted QR of `J`
/// (Moré 1978, the structured linear least-squares problem).
///
/// Givens rotations zero the rows of `D`, one at a time, against `R`
/// (Golub & Van Loan, *Matrix Computations*, 4th ed., 2013, ch. 5), giving the
/// triangular `S` with `[R; Pᵀ·D·P] = Q₂·S`; its diagonal goes to `sdiag`
/// and its strict upper triangle, transposed, to the strict lower triangle
/// of `r_work`. If `S` is singular the solution is a least-squares one.
fn qrsolv(
    r_work: &mut DMatrix<f64>,
    r: &DMatrix<f64>,
    ipvt: &[usize],
    diag: &DVector<f64>,
    qtb: &DVector<f64>,
    x: &mut DVector<f64>,
    sdiag: &mut DVector<f64>,
) {
    let n = r.ncols();
    // Copy R into the lower triangle of the scratch (transposed) and keep
    // the upper triangle as it is.
    let mut wa = qtb.clone();
    let mut rdiag = DVector::zeros(n);
    for j in 0..n {
        for i in j..n {
            r_work[(i, j)] = r[(j, i)];
        }
        for i in 0..j {
            r_work[(i, j)] = r[(i, j)];
        }
        rdiag[j] = r[(j, j)];
    }

    for j in 0..n {
        let l = ipvt[j];
        if diag[l] != 0.0 {
            for k in j..n {
                sdiag[k] = 0.0;
            }
            sdiag[j] = diag[l];
            // Rotations that eliminate row j of D, carrying the extra
            // right-hand-side entry along in `qtbpj`.
            let mut qtbpj = 0.0;
            for k in j..n {
                if sdiag[k] == 0.0 {
                    continue;
                }
                let rkk = r_work[(k, k)];
                let (cos, sin) = if rkk.abs() < sdiag[k].abs() {
                    let cotan = rkk / sdiag[k];
                    let sin = 0.5 / (0.25 + 0.25 * cotan * cotan).sqrt();
                    (sin * cotan, sin)
                } else {
                    let tan = sdiag[k] / rkk;
                    let cos = 0.5 / (0.25 + 0.25 * tan * tan).sqrt();
                    (cos, cos * tan)
                };
                r_work[(k, k)] = cos * rkk + sin * sdiag[k];
                let temp = cos * wa[k] + sin * qtbpj;
                qtbpj = -sin * wa[k] + cos * qtbpj;
                wa[k] = temp;
                for i in (k + 1)..n {
                    let temp = cos * r_work[(i, k)] + sin * sdiag[i];
                    sdiag[i] = -sin * r_work[(i, k)] + cos * sdiag[i];
                    r_work[(i, k)] = temp;
                }
            }
        }
        // Keep S's diagonal and restore R's.
        sdiag[j] = r_work[(j, j)];
        r_work[(j, j)] = rdiag[j];
    }

    // Back-substitution with S; singular S gives a least-squares solution.
    let mut nsing = n;
    for j in 0..n {
        if sdiag[j] == 0.0 && nsing == n {
            nsing = j;
        }
        if nsing < n {
            wa[j] = 0.0;
        }
    }
    for k in (0..nsing).rev() {
        let sum: f64 = ((k + 1)..nsing).map(|i| r_work[(i, k)] * wa[i]).sum();
        wa[k] = (wa[k] - sum) / sdiag[k];
    }
    for j in 0..n {
        x[ipvt[j]] = wa[j];
    }
}

/// Euclidean norm without destructive overflow or underflow, by a running
/// scale and scaled sum of squares (the method of LAPACK's `dnrm2`;
/// Hammarling, as described in Blue, "A portable Fortran program to find the
/// Euclidean norm of a vector", ACM TOMS 4(1), 1978).
pub(crate) fn enorm(v: &[f64]) -> f64 {
    let mut scale = 0.0_f64;
    let mut ssq = 1.0_f64;
    for &x in v {
        if x != 0.0 {
            let a = x.abs();
            if scale < a {
                ssq = 1.0 + ssq * (scale / a).powi(2);
                scale = a;
            } else {
                ssq += (a / scale).powi(2);
            }
        }
    }
    scale * ssq.sqrt()
}

/// `‖D·x‖` for a diagonal `D`.
fn enorm_scaled(diag: &DVector<f64>, x: &DVector<f64>) -> f64 {
    enorm(x.component_mul(diag).as_slice())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn enorm_survives_extremes() {
        // √(3·(1e200)²) overflows if squared directly.
        let big = enorm(&[1e200, 1e200, 1e200]);
        assert!((big / (3f64.sqrt() * 1e200) - 1.0).abs() < 1e-15);
        let small = enorm(&[3e-200, 4e-200]);
        assert!((small / 5e-200 - 1.0).abs() < 1e-15);
        assert_eq!(enorm(&[]), 0.0);
    }

    #[test]
    fn qrfac_reproduces_the_matrix() {
        // A·P = Q·R, checked by applying Qᵀ to each column of A·P and
        // comparing with R.
        let a0 = DMatrix::from_row_slice(
            4,
            3,
            &[1.0, 2.0, 3.0, 4.0, 5.0, 6.5, 7.0, 8.0, 10.0, 1.0, -1.0, 0.5],
        );
        let mut a = a0.clone();
        let qr = qrfac(&mut a);
        let r = qr.upper_triangle(&a);
        for j in 0..3 {
            let col = a0.column(qr.ipvt[j]).into_owned();
            let qtcol = qr.q_transpose_times(&a, &col);
            for i in 0..3 {
                let expected = if i <= j { r[(i, j)] } else { 0.0 };
                assert!(
                    (qtcol[i] - expected).abs() < 1e-12,
                    "{i},{j}: {} vs {expected}",
                    qtcol[i]
                );
            }
        }
        // Pivoting puts the column of largest norm first.
        assert_eq!(qr.ipvt[0], 2);
    }

    #[test]
    fn lmpar_step_respects_the_trust_region() {
        // For a radius much smaller than the Gauss–Newton step, ‖D·p‖ must
        // come out within 10 % of Δ (Moré 1978).
        let mut j = DMatrix::from_row_slice(3, 2, &[1.0, 0.0, 0.0, 2.0, 1.0, 1.0]);
        let f = DVector::from_vec(vec![10.0, 20.0, 5.0]);
        let qr = qrfac(&mut j);
        let qtf = qr.q_transpose_times(&j, &f);
        let r = qr.upper_triangle(&j);
        let diag = DVector::from_vec(vec![1.0, 1.0]);
        let mut scratch = r.clone();
        let delta = 0.5;
        let step = lmpar(&mut scratch, &r, &qr.ipvt, &diag, &qtf, delta, 0.0);
        let norm = enorm(step.x.as_slice());
        assert!(step.par > 0.0);
        assert!((norm - delta).abs() <= 0.1 * delta, "‖p‖ = {norm}");
    }
}
