//! Linear least squares that stays accurate on ill-conditioned designs.
//!
//! Two entry points share one result type, [`LinearFit`]:
//!
//! - [`lstsq`] keeps the whole design in memory. It factors the
//!   column-equilibrated design by Householder QR and then refines both the
//!   coefficients and the unscaled covariance on the augmented system with
//!   residuals accumulated in twice the working precision. That refinement is
//!   what lets it reach the certified digits of NIST's hardest linear sets
//!   (Filip, Longley, Wampler 4–5), where a plain QR solve loses half of them.
//! - [`QrAccumulator`] takes rows in blocks and keeps only the small
//!   triangular factor of `[X | y]`, so it can fit millions of points in
//!   constant memory and can be split across threads and merged. The rows
//!   are gone by the time it solves, so it refines against cross products
//!   `XᵀWX`, `XᵀWy` kept in twice the working precision instead; that
//!   recovers full precision for well-conditioned models such as a Cottrell
//!   line, and leaves the plain QR solution where the model is too
//!   ill-conditioned for it.

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use crate::error::FitError;

/// Most refinement sweeps [`lstsq`] makes; each one gains roughly
/// `-log10(κ·ε)` digits, so on every NIST set two sweeps already reach the
/// working precision and the rest are a safety margin.
const MAX_REFINEMENT_STEPS: usize = 5;

/// Rows per block that [`QrAccumulator::new`] folds in at a time. Large
/// enough that the cost of re-factoring the small triangle is negligible,
/// small enough that the block stays in cache.
pub const DEFAULT_BLOCK_ROWS: usize = 4096;

/// Which total sum of squares the coefficient of determination uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum RSquaredKind {
    /// `R² = 1 − RSS / Σ wᵢ(yᵢ − ȳ)²`, used when the design has an
    /// intercept column (a column whose entries are all the same non-zero
    /// number).
    Centred,
    /// `R² = 1 − RSS / Σ wᵢyᵢ²`, used for models through the origin; this is
    /// the convention of NIST StRD for its NoInt1 and NoInt2 sets.
    Uncentred,
}

/// Result of a linear least-squares fit `y ≈ X·β`.
///
/// Units: coefficient `j` has the unit of `y` divided by the unit of column
/// `j` of the design; variances and covariances carry the squares and
/// products of those units.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LinearFit {
    /// Fitted coefficients `β`, one per design column (unit: see the type
    /// documentation).
    pub coefficients: Vec<f64>,
    /// Standard errors of the coefficients, `√diag(s²·(XᵀWX)⁻¹)` (same unit
    /// as the matching coefficient).
    pub standard_errors: Vec<f64>,
    /// Covariance matrix `s²·(XᵀWX)⁻¹`, row-major, `p` rows of `p` entries
    /// (unit: product of the two coefficients' units).
    pub covariance: Vec<Vec<f64>>,
    /// Weighted residual sum of squares `Σ wᵢ(yᵢ − xᵢβ)²` (unit of `w·y²`).
    pub residual_sum_of_squares: f64,
    /// Residual standard deviation `s = √(RSS / (n − p))` (unit of `√w·y`).
    pub residual_standard_deviation: f64,
    /// Residual degrees of freedom `n − p` (count).
    pub degrees_of_freedom: usize,
    /// Number of observations `n` (count).
    pub observations: usize,
    /// Coefficient of determination (dimensionless); `None` when the total
    /// sum of squares is zero, where it is undefined.
    pub r_squared: Option<f64>,
    /// Whether [`r_squared`](Self::r_squared) is centred or not.
    pub r_squared_kind: RSquaredKind,
    /// 1-norm condition number of the column-equilibrated weighted design,
    /// from its triangular factor (dimensionless). Each factor of ten costs
    /// about one significant digit in an unrefined solve.
    pub condition_number: f64,
    /// Refinement sweeps made after the QR solve (count; 0 means the QR
    /// solution was already as accurate as refinement could make it, or
    /// that refinement did not contract).
    pub refinement_steps: usize,
}

/// Fits `y ≈ X·β` by weighted linear least squares.
///
/// `design` is `X` (`n` rows of `p` columns), `y` the `n` responses and
/// `weights`, if given, `n` positive weights `wᵢ` (for example `1/σᵢ²`); the
/// fit minimises `Σ wᵢ(yᵢ − xᵢβ)²`.
///
/// Method: Householder QR of the column-equilibrated design (Golub & Van
/// Loan, *Matrix Computations*, 4th ed., 2013, ch. 5), followed by iterative
/// refinement of the augmented system `[I X; Xᵀ 0]·[r; β] = [y; 0]` (Björck,
/// "Iterative refinement of linear least squares solutions I", BIT 7, 1967),
/// with its residuals accumulated in twice the working precision by the
/// `Dot2` algorithm (Ogita, Rump & Oishi, "Accurate sum and dot product",
/// SIAM J. Sci. Comput. 26(6), 2005). The columns of `(XᵀWX)⁻¹` are refined
/// the same way, with right-hand side `[0; −eⱼ]`, so the standard errors are
/// as accurate as the coefficients; `XᵀX` is never formed.
///
/// # Errors
///
/// [`FitError::NoParameters`], [`FitError::DimensionMismatch`],
/// [`FitError::TooFewPoints`] (fewer than `p + 1` rows),
/// [`FitError::NonFiniteInput`], [`FitError::InvalidWeight`] and
/// [`FitError::RankDeficient`].
pub fn lstsq(
    design: &DMatrix<f64>,
    y: &DVector<f64>,
    weights: Option<&DVector<f64>>,
) -> Result<LinearFit, FitError> {
    let (n, p) = design.shape();
    check_shapes(n, p, y.len(), weights.map(DVector::len))?;
    for (i, &yi) in y.iter().enumerate() {
        if !yi.is_finite() {
            return Err(FitError::NonFiniteInput {
                what: "response",
                row: i,
            });
        }
    }
    for i in 0..n {
        if design.row(i).iter().any(|v| !v.is_finite()) {
            return Err(FitError::NonFiniteInput {
                what: "design",
                row: i,
            });
        }
    }
    let sqrt_w = match weights {
        Some(w) => {
            for (i, &wi) in w.iter().enumerate() {
                check_weight(i, wi)?;
            }
            Some(w.map(f64::sqrt))
        }
        None => None,
    };

    // Multiplying each row by √wᵢ turns the weighted problem into an
    // ordinary one (Björck, *Numerical Methods for Least Squares Problems*,
    // 1996).
    let mut a = design.clone();
    let mut b = y.clone();
    if let Some(sw) = &sqrt_w {
        for i in 0..n {
            a.row_mut(i).scale_mut(sw[i]);
            b[i] *= sw[i];
        }
    }

    let eq = Equilibrated::new(a)?;
    let mut x =
        eq.r.solve_upper_triangular_unchecked(&(eq.q.transpose() * &b));
    let mut res = residual(&eq.a, &b, &x);
    let refinement_steps = eq.refine(Some(&b), None, &mut x, &mut res);
    let unit_cov = eq.scaled_unit_covariance();

    let rss = {
        let mut acc = Dot2::default();
        for &ri in res.iter() {
            acc.add_product(ri, ri);
        }
        acc.value()
    };

    let kind = if has_intercept_column(design) {
        RSquaredKind::Centred
    } else {
        RSquaredKind::Uncentred
    };
    let tss = total_sum_of_squares(y, weights, kind);

    Ok(assemble(&Assembly {
        scaled_coefficients: &x,
        unit_covariance: &unit_cov,
        scale: &eq.scale,
        rss,
        observations: n,
        tss,
        kind,
        condition_number: eq.condition_number,
        refinement_steps,
    }))
}

/// Streaming linear least squares by tall-skinny QR.
///
/// Rows go in one at a time ([`push_row`](Self::push_row)) or as a matrix
/// ([`push_rows`](Self::push_rows)); every `block_rows` rows the buffered
/// block is stacked under the current triangular factor `R` of `[√W·X | √W·y]`
/// and re-factored, so memory stays at `(p + 1)²` numbers plus one block.
/// Because `QR([R₁; R₂])` is a factor of the two halves' rows together
/// (Demmel, Grigori, Hoemmen & Langou, "Communication-optimal parallel and
/// sequential QR and LU factorizations", SIAM J. Sci. Comput. 34(1), 2012),
/// two accumulators filled on different threads can be
/// [`merge`](Self::merge)d. [`finish`](Self::finish) reads the coefficients,
/// covariance and residual sum of squares off the final factor (the last
/// diagonal entry of `R` is `±√RSS`).
///
/// Alongside `R` it keeps `XᵀWX` and `XᵀWy` summed in twice the working
/// precision (`Dot2`, Ogita, Rump & Oishi 2005) and refines the coefficients
/// against them, `β ← β + R⁻¹R⁻ᵀ(XᵀWy − XᵀWX·β)`: the corrected
/// semi-normal equations (Björck, "Stability analysis of the method of
/// seminormal equations for linear least squares problems", Linear Algebra
/// Appl. 88/89, 1987) with an extended-precision residual. Each sweep
/// shrinks the error by about `κ²·ε`, so a well-conditioned model reaches
/// the accuracy of [`lstsq`] (a single QR loses the digits that an
/// intercept small against the data's scale needs); when the sweeps stop
/// shrinking, the last one is undone and the QR solution stands.
#[derive(Debug, Clone)]
pub struct QrAccumulator {
    parameters: usize,
    block_rows: usize,
    /// Upper-triangular `(p + 1) × (p + 1)` factor of all rows folded in.
    r: DMatrix<f64>,
    /// Rows not yet folded in, already multiplied by `√w`.
    buffer: DMatrix<f64>,
    buffered: usize,
    observations: usize,
    response: ResponseMoments,
    columns: Vec<ColumnShape>,
    /// Upper triangle of `XᵀWX`: entry `(j, k)`, `j ≤ k`, at `j·p + k`.
    gram: Vec<Dot2>,
    /// `XᵀWy`.
    cross: Vec<Dot2>,
    /// `yᵀWy`.
    yy: Dot2,
}

impl QrAccumulator {
    /// An empty accumulator for a model with `parameters` design columns,
    /// folding rows in blocks of [`DEFAULT_BLOCK_ROWS`].
    pub fn new(parameters: usize) -> Self {
        Self::with_block_rows(parameters, DEFAULT_BLOCK_ROWS)
    }

    /// An empty accumulator folding rows in blocks of `block_rows` (at least
    /// one).
    pub fn with_block_rows(parameters: usize, block_rows: usize) -> Self {
        let block_rows = block_rows.max(1);
        Self {
            parameters,
            block_rows,
            r: DMatrix::zeros(parameters + 1, parameters + 1),
            buffer: DMatrix::zeros(block_rows, parameters + 1),
            buffered: 0,
            observations: 0,
            response: ResponseMoments::default(),
            columns: vec![ColumnShape::Unseen; parameters],
            gram: vec![Dot2::default(); parameters * parameters],
            cross: vec![Dot2::default(); parameters],
            yy: Dot2::default(),
        }
    }

    /// Number of design columns (parameters) this accumulator fits.
    pub fn parameters(&self) -> usize {
        self.parameters
    }

    /// Observations taken so far (count).
    pub fn observations(&self) -> usize {
        self.observations
    }

    /// Adds one observation: design row `row` (length `p`), response `y`
    /// and weight `weight` (use `1.0` for an unweighted fit).
    ///
    /// # Errors
    ///
    /// [`FitError::ParameterCountMismatch`] for a row of the wrong length,
    /// [`FitError::NonFiniteInput`] and [`FitError::InvalidWeight`]; the
    /// accumulator is unchanged when an error is returned.
    pub fn push_row(&mut self, row: &[f64], y: f64, weight: f64) -> Result<(), FitError> {
        if row.len() != self.parameters {
            return Err(FitError::ParameterCountMismatch {
                expected: self.parameters,
                found: row.len(),
            });
        }
        let index = self.observations;
        if row.iter().any(|v| !v.is_finite()) {
            return Err(FitError::NonFiniteInput {
                what: "design",
                row: index,
            });
        }
        if !y.is_finite() {
            return Err(FitError::NonFiniteInput {
                what: "response",
                row: index,
            });
        }
        check_weight(index, weight)?;

        let sw = weight.sqrt();
        let slot = self.buffered;
        for (j, &v) in row.iter().enumerate() {
            self.buffer[(slot, j)] = sw * v;
            self.columns[j].observe(v);
        }
        let p = self.parameters;
        let by = sw * y;
        self.buffer[(slot, p)] = by;
        self.yy.add_product(by, by);
        // The cross products use the same rounded rows √w·x as R, so both
        // describe one and the same problem.
        for k in 0..p {
            let ak = self.buffer[(slot, k)];
            self.cross[k].add_product(ak, by);
            for j in k..p {
                self.gram[k * p + j].add_product(self.buffer[(slot, j)], ak);
            }
        }
        self.buffered += 1;
        self.observations += 1;
        self.response.push(y, weight);
        if self.buffered == self.block_rows {
            self.flush();
        }
        Ok(())
    }

    /// Adds every row of `design` with the matching `y` and optional
    /// `weights`.
    ///
    /// # Errors
    ///
    /// As [`push_row`](Self::push_row), plus [`FitError::DimensionMismatch`];
    /// rows before the offending one have been taken.
    pub fn push_rows(
        &mut self,
        design: &DMatrix<f64>,
        y: &DVector<f64>,
        weights: Option<&DVector<f64>>,
    ) -> Result<(), FitError> {
        let (n, p) = design.shape();
        if p != self.parameters {
            return Err(FitError::ParameterCountMismatch {
                expected: self.parameters,
                found: p,
            });
        }
        if y.len() != n {
            return Err(FitError::DimensionMismatch {
                what: "response",
                found: y.len(),
                expected: n,
            });
        }
        if let Some(w) = weights
            && w.len() != n
        {
            return Err(FitError::DimensionMismatch {
                what: "weights",
                found: w.len(),
                expected: n,
            });
        }
        let mut row = vec![0.0; p];
        for i in 0..n {
            for (j, slot) in row.iter_mut().enumerate() {
                *slot = design[(i, j)];
            }
            self.push_row(&row, y[i], weights.map_or(1.0, |w| w[i]))?;
        }
        Ok(())
    }

    /// Folds `other` (filled from different rows) into `self`.
    ///
    /// # Errors
    ///
    /// [`FitError::ParameterCountMismatch`] when the two were made for
    /// different numbers of parameters.
    pub fn merge(&mut self, mut other: QrAccumulator) -> Result<(), FitError> {
        if other.parameters != self.parameters {
            return Err(FitError::ParameterCountMismatch {
                expected: self.parameters,
                found: other.parameters,
            });
        }
        self.flush();
        other.flush();
        let k = self.parameters + 1;
        let mut stacked = DMatrix::zeros(2 * k, k);
        stacked.rows_mut(0, k).copy_from(&self.r);
        stacked.rows_mut(k, k).copy_from(&other.r);
        self.r = stacked.qr().unpack_r();
        self.observations += other.observations;
        self.response.merge(&other.response);
        for (mine, theirs) in self.columns.iter_mut().zip(&other.columns) {
            *mine = mine.merge(*theirs);
        }
        for (mine, theirs) in self.gram.iter_mut().zip(&other.gram) {
            mine.merge(theirs);
        }
        for (mine, theirs) in self.cross.iter_mut().zip(&other.cross) {
            mine.merge(theirs);
        }
        self.yy.merge(&other.yy);
        Ok(())
    }

    /// Solves the accumulated problem.
    ///
    /// # Errors
    ///
    /// [`FitError::NoParameters`], [`FitError::TooFewPoints`] and
    /// [`FitError::RankDeficient`].
    pub fn finish(mut self) -> Result<LinearFit, FitError> {
        let p = self.parameters;
        check_shapes(self.observations, p, self.observations, None)?;
        self.flush();

        let mut r11 = self.r.view((0, 0), (p, p)).upper_triangle();
        let z = self.r.view((0, p), (p, 1)).column(0).into_owned();

        // The column norms of R equal those of √W·X, so the same exact
        // equilibration as in `lstsq` can be applied to R directly.
        let mut scale = DVector::zeros(p);
        for j in 0..p {
            let norm = r11.column(j).norm();
            if norm == 0.0 {
                return Err(FitError::RankDeficient {
                    column: j,
                    rank: p - 1,
                    parameters: p,
                    condition_number: f64::INFINITY,
                });
            }
            scale[j] = power_of_two_near(norm);
            r11.column_mut(j).unscale_mut(scale[j]);
        }
        let condition_number = check_rank(&r11, self.observations)?;
        let mut x = r11.solve_upper_triangular_unchecked(&z);
        let refinement_steps = self.refine(&r11, &scale, &mut x);
        let coefficients = DVector::from_fn(p, |j, _| x[j] / scale[j]);
        // The residual sum of squares of the coefficients actually
        // reported; the last diagonal entry of R is the fallback, should
        // rounding make the expansion meaningless.
        let rss = match self.residual_sum_of_squares(&coefficients) {
            Some(rss) => rss,
            None => self.r[(p, p)] * self.r[(p, p)],
        };
        let identity = DMatrix::identity(p, p);
        let r_inv = r11.solve_upper_triangular_unchecked(&identity);
        let unit_cov = &r_inv * r_inv.transpose();

        let kind = if self
            .columns
            .iter()
            .any(|c| matches!(c, ColumnShape::Constant(v) if *v != 0.0))
        {
            RSquaredKind::Centred
        } else {
            RSquaredKind::Uncentred
        };
        let tss = match kind {
            RSquaredKind::Centred => self.response.centred(),
            RSquaredKind::Uncentred => self.response.uncentred(),
        };

        Ok(assemble(&Assembly {
            scaled_coefficients: &x,
            unit_covariance: &unit_cov,
            scale: &scale,
            rss,
            observations: self.observations,
            tss,
            kind,
            condition_number,
            refinement_steps,
        }))
    }

    /// `yᵀWy − 2βᵀXᵀWy + βᵀXᵀWXβ`, from the extended-precision cross
    /// products. Every product of two doubles is split exactly
    /// (`TwoProduct`), so the cancellation between the three terms costs
    /// nothing at the precision of `Dot2`.
    fn residual_sum_of_squares(&self, beta: &DVector<f64>) -> Option<f64> {
        let p = self.parameters;
        let mut acc = self.yy;
        for j in 0..p {
            let c = self.cross[j];
            acc.add_product(-2.0 * c.sum, beta[j]);
            acc.add_product(-2.0 * c.err, beta[j]);
            for k in j..p {
                let g = self.gram[j * p + k];
                // Off-diagonal entries stand for both (j, k) and (k, j).
                let factor = if j == k { 1.0 } else { 2.0 };
                let hi = beta[j] * beta[k];
                let lo = beta[j].mul_add(beta[k], -hi);
                acc.add_product(factor * g.sum, hi);
                acc.add_product(factor * g.sum, lo);
                acc.add_product(factor * g.err, hi);
            }
        }
        let rss = acc.value();
        (rss.is_finite() && rss >= 0.0).then_some(rss)
    }

    /// Corrected semi-normal-equation sweeps on the equilibrated
    /// coefficients `x` (see the type documentation); returns the number of
    /// sweeps kept.
    fn refine(&self, r: &DMatrix<f64>, scale: &DVector<f64>, x: &mut DVector<f64>) -> usize {
        let p = self.parameters;
        // Only the upper triangle was summed; G is symmetric.
        let gram = |j: usize, k: usize| {
            let (a, b) = if j <= k { (j, k) } else { (k, j) };
            self.gram[a * p + b]
        };
        let mut previous = f64::INFINITY;
        for step in 0..MAX_REFINEMENT_STEPS {
            // d = S⁻¹(XᵀWy − XᵀWX·S⁻¹x); dividing by powers of two is exact.
            let d = DVector::from_fn(p, |j, _| {
                let mut acc = self.cross[j];
                for k in 0..p {
                    let g = gram(j, k);
                    let xk = x[k] / scale[k];
                    acc.add_product(-g.sum, xk);
                    acc.add_product(-g.err, xk);
                }
                acc.value() / scale[j]
            });
            let dx = r.solve_upper_triangular_unchecked(&r.tr_solve_upper_triangular_unchecked(&d));
            let size = dx.amax();
            if size >= previous {
                // Not contracting: κ²·ε is too large for this model, and a
                // further sweep would only add noise.
                return step;
            }
            *x += &dx;
            if size <= f64::EPSILON * x.amax() {
                return step + 1;
            }
            previous = size;
        }
        MAX_REFINEMENT_STEPS
    }

    /// Folds the buffered rows into the triangular factor.
    fn flush(&mut self) {
        if self.buffered == 0 {
            return;
        }
        let k = self.parameters + 1;
        let mut stacked = DMatrix::zeros(k + self.buffered, k);
        stacked.rows_mut(0, k).copy_from(&self.r);
        stacked
            .rows_mut(k, self.buffered)
            .copy_from(&self.buffer.rows(0, self.buffered));
        self.r = stacked.qr().unpack_r();
        self.buffered = 0;
    }
}

/// What has been seen of one design column, to recognise an intercept.
#[derive(Debug, Clone, Copy, PartialEq)]
enum ColumnShape {
    Unseen,
    Constant(f64),
    Varying,
}

impl ColumnShape {
    fn observe(&mut self, v: f64) {
        *self = self.merge(ColumnShape::Constant(v));
    }

    fn merge(self, other: ColumnShape) -> ColumnShape {
        match (self, other) {
            (ColumnShape::Unseen, s) | (s, ColumnShape::Unseen) => s,
            (ColumnShape::Constant(a), ColumnShape::Constant(b)) if a == b => self,
            _ => ColumnShape::Varying,
        }
    }
}

/// Weighted moments of the response, for the total sum of squares.
///
/// The running mean and centred sum of squares follow West's weighted
/// update ("Updating mean and variance estimates: an improved method",
/// Comm. ACM 22(9), 1979), and two halves combine by the pairwise formula of
/// Chan, Golub & LeVeque ("Updating formulae and a pairwise algorithm for
/// computing sample variances", Stanford CS report STAN-CS-79-773, 1979);
/// both avoid the cancellation of `Σwy² − (Σwy)²/Σw`.
#[derive(Debug, Clone, Copy, Default)]
struct ResponseMoments {
    sum_w: f64,
    mean: f64,
    centred_ss: f64,
    raw_ss: Dot2,
}

impl ResponseMoments {
    fn push(&mut self, y: f64, w: f64) {
        self.sum_w += w;
        let delta = y - self.mean;
        self.mean += delta * w / self.sum_w;
        self.centred_ss += w * delta * (y - self.mean);
        self.raw_ss.add_product(w * y, y);
    }

    fn merge(&mut self, other: &ResponseMoments) {
        if other.sum_w == 0.0 {
            return;
        }
        if self.sum_w == 0.0 {
            *self = *other;
            return;
        }
        let total = self.sum_w + other.sum_w;
        let delta = other.mean - self.mean;
        self.centred_ss += other.centred_ss + delta * delta * self.sum_w * other.sum_w / total;
        self.mean += delta * other.sum_w / total;
        self.sum_w = total;
        self.raw_ss.merge(&other.raw_ss);
    }

    fn centred(&self) -> f64 {
        self.centred_ss
    }

    fn uncentred(&self) -> f64 {
        self.raw_ss.value()
    }
}

/// The pieces of a fit in the equilibrated basis, to be mapped back.
struct Assembly<'a> {
    scaled_coefficients: &'a DVector<f64>,
    /// `(AᵀA)⁻¹` of the equilibrated weighted design `A`.
    unit_covariance: &'a DMatrix<f64>,
    scale: &'a DVector<f64>,
    rss: f64,
    observations: usize,
    tss: f64,
    kind: RSquaredKind,
    condition_number: f64,
    refinement_steps: usize,
}

/// Undoes the column scaling and derives the statistics.
///
/// With `A = X·S⁻¹` and `β = S⁻¹·x`, `(XᵀX)⁻¹ = S⁻¹(AᵀA)⁻¹S⁻¹`; the
/// covariance is `s²·(XᵀX)⁻¹` with `s² = RSS/(n − p)` (Draper & Smith,
/// *Applied Regression Analysis*, 3rd ed., 1998), and
/// `R² = 1 − RSS/TSS` (ibid.).
fn assemble(parts: &Assembly<'_>) -> LinearFit {
    let p = parts.scale.len();
    let dof = parts.observations - p;
    let s2 = parts.rss / dof as f64;
    let coefficients: Vec<f64> = (0..p)
        .map(|j| parts.scaled_coefficients[j] / parts.scale[j])
        .collect();
    let covariance: Vec<Vec<f64>> = (0..p)
        .map(|i| {
            (0..p)
                .map(|j| s2 * parts.unit_covariance[(i, j)] / (parts.scale[i] * parts.scale[j]))
                .collect()
        })
        .collect();
    let standard_errors = (0..p).map(|j| covariance[j][j].max(0.0).sqrt()).collect();
    let r_squared = (parts.tss > 0.0).then(|| 1.0 - parts.rss / parts.tss);
    LinearFit {
        coefficients,
        standard_errors,
        covariance,
        residual_sum_of_squares: parts.rss,
        residual_standard_deviation: s2.sqrt(),
        degrees_of_freedom: dof,
        observations: parts.observations,
        r_squared,
        r_squared_kind: parts.kind,
        condition_number: parts.condition_number,
        refinement_steps: parts.refinement_steps,
    }
}

/// A design with its columns equilibrated by exact powers of two, and the
/// Householder QR factors of the result, checked for full rank.
///
/// Column equilibration by powers of two changes neither the data nor the
/// rounding of the QR; it makes the condition number and the rank test mean
/// something when columns differ by many decades (Filip's x¹⁰ against its
/// intercept, or a Jacobian column for a rate constant against one for an
/// amplitude).
#[derive(Debug, Clone)]
pub(crate) struct Equilibrated {
    /// The equilibrated matrix `A = X·S⁻¹`.
    a: DMatrix<f64>,
    /// The diagonal of `S`.
    scale: DVector<f64>,
    /// Thin `Q` (`n × p`).
    q: DMatrix<f64>,
    /// `R` (`p × p`).
    r: DMatrix<f64>,
    /// 1-norm condition number of `A`, from `R`.
    condition_number: f64,
}

impl Equilibrated {
    /// Equilibrates and factors `x`, which must have more rows than
    /// columns.
    ///
    /// # Errors
    ///
    /// [`FitError::RankDeficient`] when `x` does not have full column rank
    /// to working precision.
    pub(crate) fn new(mut x: DMatrix<f64>) -> Result<Self, FitError> {
        let (n, p) = x.shape();
        let mut scale = DVector::zeros(p);
        for j in 0..p {
            let norm = x.column(j).norm();
            if norm == 0.0 {
                return Err(FitError::RankDeficient {
                    column: j,
                    rank: p - 1,
                    parameters: p,
                    condition_number: f64::INFINITY,
                });
            }
            scale[j] = power_of_two_near(norm);
            x.column_mut(j).unscale_mut(scale[j]);
        }
        let qr = x.clone().qr();
        let r = qr.r();
        let q = qr.q();
        let condition_number = check_rank(&r, n)?;
        Ok(Self {
            a: x,
            scale,
            q,
            r,
            condition_number,
        })
    }

    /// 1-norm condition number of the equilibrated matrix (dimensionless).
    pub(crate) fn condition_number(&self) -> f64 {
        self.condition_number
    }

    /// `(AᵀA)⁻¹` of the equilibrated matrix, each column refined.
    ///
    /// The augmented system with right-hand side `[0; −eⱼ]` has solution
    /// `x = (AᵀA)⁻¹eⱼ` and residual `r = −A·x` (Björck 1996), so the
    /// same refinement as for the coefficients applies and `AᵀA` is never
    /// formed.
    fn scaled_unit_covariance(&self) -> DMatrix<f64> {
        let p = self.r.ncols();
        let mut unit_cov = DMatrix::zeros(p, p);
        for j in 0..p {
            let mut e = DVector::zeros(p);
            e[j] = 1.0;
            let mut col = self
                .r
                .solve_upper_triangular_unchecked(&self.r.tr_solve_upper_triangular_unchecked(&e));
            let mut col_res = -(&self.a * &col);
            self.refine(None, Some(j), &mut col, &mut col_res);
            unit_cov.set_column(j, &col);
        }
        // Both triangles were computed independently; averaging them gives
        // an exactly symmetric matrix without favouring either.
        (&unit_cov + unit_cov.transpose()) * 0.5
    }

    /// `(XᵀX)⁻¹` of the original matrix: `S⁻¹(AᵀA)⁻¹S⁻¹`.
    pub(crate) fn inverse_gram(&self) -> DMatrix<f64> {
        let c = self.scaled_unit_covariance();
        DMatrix::from_fn(c.nrows(), c.ncols(), |i, j| {
            c[(i, j)] / (self.scale[i] * self.scale[j])
        })
    }

    /// Refines `(res, x)` towards the solution of the augmented system
    /// `[I A; Aᵀ 0]·[res; x] = [b; c]`, where `b` is `rhs` (or zero) and `c`
    /// is `−e_unit` (or zero).
    ///
    /// Each sweep computes the defects `f = b − res − A·x` and
    /// `g = c − Aᵀ·res` in twice the working precision (Ogita, Rump & Oishi
    /// 2005, `Dot2`) and solves for the correction with the existing QR
    /// factors: `h = R⁻ᵀg`, `d = Q₁ᵀf`, `δx = R⁻¹(d − h)`,
    /// `δres = f + Q₁(h − d)` (Björck, BIT 7, 1967; Björck, *Numerical
    /// Methods for Least Squares Problems*, 1996). Because the defect
    /// of the residual is corrected too, this converges at a rate set by κ
    /// rather than κ², and so does not stall on large-residual problems.
    ///
    /// Returns the number of sweeps made.
    fn refine(
        &self,
        rhs: Option<&DVector<f64>>,
        unit: Option<usize>,
        x: &mut DVector<f64>,
        res: &mut DVector<f64>,
    ) -> usize {
        let (n, p) = self.a.shape();
        let mut previous = f64::INFINITY;
        for step in 1..=MAX_REFINEMENT_STEPS {
            let mut f = DVector::zeros(n);
            for i in 0..n {
                let mut acc = Dot2::default();
                if let Some(b) = rhs {
                    acc.add(b[i]);
                }
                acc.add(-res[i]);
                for j in 0..p {
                    acc.add_product(-self.a[(i, j)], x[j]);
                }
                f[i] = acc.value();
            }
            let mut g = DVector::zeros(p);
            for j in 0..p {
                let mut acc = Dot2::default();
                if unit == Some(j) {
                    acc.add(-1.0);
                }
                for (aij, ri) in self.a.column(j).iter().zip(res.iter()) {
                    acc.add_product(-aij, *ri);
                }
                g[j] = acc.value();
            }
            let h = self.r.tr_solve_upper_triangular_unchecked(&g);
            let d = self.q.tr_mul(&f);
            let dx = self.r.solve_upper_triangular_unchecked(&(&d - &h));
            let size = dx.amax();
            if size >= previous {
                // The corrections stopped shrinking: the factorisation is as
                // good as it gets, and this sweep would only add noise.
                return step - 1;
            }
            let dres = &f + &self.q * (&h - &d);
            *x += &dx;
            *res += &dres;
            // Stop once the correction is below the rounding of x.
            if size <= f64::EPSILON * x.amax() {
                return step;
            }
            previous = size;
        }
        MAX_REFINEMENT_STEPS
    }
}

/// `b − A·x`, accumulated in twice the working precision.
fn residual(a: &DMatrix<f64>, b: &DVector<f64>, x: &DVector<f64>) -> DVector<f64> {
    let (n, p) = a.shape();
    DVector::from_fn(n, |i, _| {
        let mut acc = Dot2::default();
        acc.add(b[i]);
        for j in 0..p {
            acc.add_product(-a[(i, j)], x[j]);
        }
        acc.value()
    })
}

/// Checks that the triangular factor of an equilibrated matrix is of full
/// rank and returns its 1-norm condition number `‖R‖₁·‖R⁻¹‖₁`.
///
/// A diagonal entry below `max(n, p)·ε·max|rⱼⱼ|` counts as zero, the usual
/// numerical-rank threshold (Golub & Van Loan, *Matrix Computations*, 4th
/// ed., 2013, ch. 5); a condition number above `1/(max(n, p)·ε)` is treated the
/// same way, because the solution then has no correct digit.
fn check_rank(r: &DMatrix<f64>, rows: usize) -> Result<f64, FitError> {
    let p = r.ncols();
    let tol = rows.max(p) as f64 * f64::EPSILON;
    let diag_max = (0..p).map(|k| r[(k, k)].abs()).fold(0.0, f64::max);
    let rank = (0..p).filter(|&k| r[(k, k)].abs() > tol * diag_max).count();
    let condition_number = if rank < p {
        f64::INFINITY
    } else {
        let r_inv = r.solve_upper_triangular_unchecked(&DMatrix::identity(p, p));
        norm1(r) * norm1(&r_inv)
    };
    // Written so that a NaN condition number also counts as deficient.
    let well_conditioned = condition_number * tol < 1.0;
    if rank < p || !well_conditioned {
        // Without pivoting, the first negligible diagonal entry marks the
        // first column that the ones before it (nearly) span; when none is
        // negligible but the whole is too ill-conditioned, the smallest
        // one is the best guess.
        let smallest = (0..p)
            .min_by(|&i, &j| r[(i, i)].abs().total_cmp(&r[(j, j)].abs()))
            .unwrap_or(0);
        let column = (0..p)
            .find(|&k| r[(k, k)].abs() <= tol * diag_max)
            .unwrap_or(smallest);
        return Err(FitError::RankDeficient {
            column,
            rank: rank.min(p - 1),
            parameters: p,
            condition_number,
        });
    }
    Ok(condition_number)
}

/// Largest absolute column sum.
fn norm1(m: &DMatrix<f64>) -> f64 {
    m.column_iter()
        .map(|c| c.iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max)
}

fn check_shapes(
    rows: usize,
    parameters: usize,
    responses: usize,
    weights: Option<usize>,
) -> Result<(), FitError> {
    if parameters == 0 {
        return Err(FitError::NoParameters);
    }
    if responses != rows {
        return Err(FitError::DimensionMismatch {
            what: "response",
            found: responses,
            expected: rows,
        });
    }
    if let Some(w) = weights
        && w != rows
    {
        return Err(FitError::DimensionMismatch {
            what: "weights",
            found: w,
            expected: rows,
        });
    }
    if rows <= parameters {
        return Err(FitError::TooFewPoints {
            points: rows,
            parameters,
        });
    }
    Ok(())
}

fn check_weight(row: usize, weight: f64) -> Result<(), FitError> {
    if weight.is_finite() && weight > 0.0 {
        Ok(())
    } else {
        Err(FitError::InvalidWeight { row, weight })
    }
}

/// The power of two nearest to `v > 0` (in the logarithmic sense), so that
/// dividing by it is exact.
fn power_of_two_near(v: f64) -> f64 {
    let e = v.log2().round().clamp(-1000.0, 1000.0);
    // `e` is a small whole number after the clamp, so the cast is exact.
    #[allow(clippy::cast_possible_truncation)]
    let e = e as i32;
    2f64.powi(e)
}

/// Whether some column of the unweighted design is one non-zero constant.
fn has_intercept_column(design: &DMatrix<f64>) -> bool {
    design.column_iter().any(|c| {
        let first = c[0];
        first != 0.0 && c.iter().all(|&v| v == first)
    })
}

/// `Σwᵢ(yᵢ − ȳ)²` with the weighted mean `ȳ`, or `Σwᵢyᵢ²`, in two passes
/// with compensated sums.
fn total_sum_of_squares(
    y: &DVector<f64>,
    weights: Option<&DVector<f64>>,
    kind: RSquaredKind,
) -> f64 {
    let w = |i: usize| weights.map_or(1.0, |w| w[i]);
    let centre = match kind {
        RSquaredKind::Uncentred => 0.0,
        RSquaredKind::Centred => {
            let mut sum_wy = Dot2::default();
            let mut sum_w = Dot2::default();
            for (i, &yi) in y.iter().enumerate() {
                sum_wy.add_product(w(i), yi);
                sum_w.add(w(i));
            }
            sum_wy.value() / sum_w.value()
        }
    };
    let mut tss = Dot2::default();
    for (i, &yi) in y.iter().enumerate() {
        let d = yi - centre;
        tss.add_product(w(i) * d, d);
    }
    tss.value()
}

/// A running sum of products in twice the working precision: the `Dot2`
/// algorithm of Ogita, Rump & Oishi ("Accurate sum and dot product", SIAM J.
/// Sci. Comput. 26(6), 2005), built from Knuth's error-free `TwoSum` (*The
/// Art of Computer Programming* vol. 2, 1997) and the fused multiply–add
/// form of `TwoProduct`. The result is as accurate as if computed in
/// quadruple precision and then rounded, up to a factor of the condition
/// number of the sum.
#[derive(Debug, Clone, Copy, Default)]
struct Dot2 {
    sum: f64,
    err: f64,
}

impl Dot2 {
    fn add(&mut self, a: f64) {
        let t = self.sum + a;
        let z = t - self.sum;
        self.err += (self.sum - (t - z)) + (a - z);
        self.sum = t;
    }

    fn add_product(&mut self, a: f64, b: f64) {
        let h = a * b;
        // The fused multiply–add returns the exact rounding error of `a*b`.
        self.err += a.mul_add(b, -h);
        self.add(h);
    }

    fn merge(&mut self, other: &Dot2) {
        self.add(other.sum);
        self.err += other.err;
    }

    fn value(&self) -> f64 {
        self.sum + self.err
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line_design(x: &[f64]) -> DMatrix<f64> {
        DMatrix::from_fn(x.len(), 2, |i, j| if j == 0 { 1.0 } else { x[i] })
    }

    #[test]
    fn exact_line_is_recovered() {
        // y = 2 + 3x exactly; the expected values are the generating ones.
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let y = DVector::from_iterator(5, x.iter().map(|v| 2.0 + 3.0 * v));
        let fit = lstsq(&line_design(&x), &y, None).unwrap();
        assert!((fit.coefficients[0] - 2.0).abs() < 1e-14);
        assert!((fit.coefficients[1] - 3.0).abs() < 1e-14);
        assert!(fit.residual_sum_of_squares < 1e-26);
        assert_eq!(fit.degrees_of_freedom, 3);
        assert_eq!(fit.r_squared_kind, RSquaredKind::Centred);
    }

    #[test]
    fn fit_serializes_with_its_field_names() {
        let x = [0.0, 1.0, 2.0, 3.0];
        let y = DVector::from_vec(vec![0.1, 1.2, 1.9, 3.2]);
        let fit = lstsq(&line_design(&x), &y, None).unwrap();
        let json = serde_json::to_value(&fit).unwrap();
        assert_eq!(json["coefficients"].as_array().unwrap().len(), 2);
        assert_eq!(json["r_squared_kind"], "Centred");
        assert_eq!(json["degrees_of_freedom"], 2);
    }

    #[test]
    fn weights_match_duplicated_rows() {
        // Weight 2 on a row is the same fit as that row given twice (the
        // normal equations are identical), so the two must agree.
        let x = [0.0, 1.0, 2.0, 3.0];
        let y = DVector::from_vec(vec![0.1, 1.2, 1.9, 3.2]);
        let w = DVector::from_vec(vec![1.0, 2.0, 1.0, 1.0]);
        let weighted = lstsq(&line_design(&x), &y, Some(&w)).unwrap();
        let xd = [0.0, 1.0, 1.0, 2.0, 3.0];
        let yd = DVector::from_vec(vec![0.1, 1.2, 1.2, 1.9, 3.2]);
        let dup = lstsq(&line_design(&xd), &yd, None).unwrap();
        for j in 0..2 {
            assert!((weighted.coefficients[j] - dup.coefficients[j]).abs() < 1e-14);
        }
        assert!((weighted.residual_sum_of_squares - dup.residual_sum_of_squares).abs() < 1e-14);
    }

    #[test]
    fn rank_deficient_design_is_refused() {
        // The third column is the sum of the first two.
        let design = DMatrix::from_row_slice(
            4,
            3,
            &[1.0, 0.0, 1.0, 1.0, 1.0, 2.0, 1.0, 2.0, 3.0, 1.0, 3.0, 4.0],
        );
        let y = DVector::from_vec(vec![1.0, 2.0, 2.5, 4.0]);
        let err = lstsq(&design, &y, None).unwrap_err();
        assert!(
            matches!(
                err,
                FitError::RankDeficient {
                    column: 2,
                    rank: 2,
                    parameters: 3,
                    ..
                }
            ),
            "{err:?}"
        );
        assert!(err.to_string().starts_with(
            "rank-deficient model: column 2 is a linear combination of the others (numerical rank 2 of 3"
        ));
    }

    #[test]
    fn zero_column_is_refused() {
        let design = DMatrix::from_row_slice(3, 2, &[1.0, 0.0, 1.0, 0.0, 1.0, 0.0]);
        let y = DVector::from_vec(vec![1.0, 2.0, 3.0]);
        let err = lstsq(&design, &y, None).unwrap_err();
        assert_eq!(
            err.to_string(),
            "rank-deficient model: column 1 is a linear combination of the others \
             (numerical rank 1 of 2, condition number inf)"
        );
    }

    #[test]
    fn too_few_points_are_refused() {
        let x = [1.0, 2.0];
        let y = DVector::from_vec(vec![1.0, 2.0]);
        let err = lstsq(&line_design(&x), &y, None).unwrap_err();
        assert_eq!(
            err.to_string(),
            "too few points: 2 points for 2 parameters, need at least 3"
        );
        let mut acc = QrAccumulator::new(2);
        acc.push_row(&[1.0, 1.0], 1.0, 1.0).unwrap();
        assert_eq!(
            acc.finish().unwrap_err(),
            FitError::TooFewPoints {
                points: 1,
                parameters: 2
            }
        );
    }

    #[test]
    fn bad_inputs_are_named() {
        let x = [1.0, 2.0, 3.0];
        let y = DVector::from_vec(vec![1.0, f64::NAN, 3.0]);
        let err = lstsq(&line_design(&x), &y, None).unwrap_err();
        assert_eq!(err.to_string(), "non-finite value in response at row 1");
        let y = DVector::from_vec(vec![1.0, 2.0, 3.0]);
        let w = DVector::from_vec(vec![1.0, 1.0, -1.0]);
        let err = lstsq(&line_design(&x), &y, Some(&w)).unwrap_err();
        assert_eq!(
            err.to_string(),
            "weight -1 at row 2 is not a positive finite number"
        );
        let y = DVector::from_vec(vec![1.0, 2.0]);
        let err = lstsq(&line_design(&x), &y, None).unwrap_err();
        assert_eq!(
            err.to_string(),
            "response has 2 entries but 3 were expected"
        );
    }

    #[test]
    fn accumulator_merge_matches_single_pass() {
        // Any split of the rows must give the same factor up to rounding.
        let x: Vec<f64> = (0..1000).map(|i| f64::from(i) * 0.01).collect();
        let y: Vec<f64> = x
            .iter()
            .map(|v| 1.0 + 0.5 * v + (v * 7.0).sin() * 0.01)
            .collect();
        let mut whole = QrAccumulator::with_block_rows(2, 64);
        let mut first = QrAccumulator::with_block_rows(2, 100);
        let mut second = QrAccumulator::with_block_rows(2, 7);
        for (i, (&xi, &yi)) in x.iter().zip(&y).enumerate() {
            whole.push_row(&[1.0, xi], yi, 1.0).unwrap();
            if i < 333 {
                first.push_row(&[1.0, xi], yi, 1.0).unwrap();
            } else {
                second.push_row(&[1.0, xi], yi, 1.0).unwrap();
            }
        }
        first.merge(second).unwrap();
        let a = whole.finish().unwrap();
        let b = first.finish().unwrap();
        assert_eq!(a.observations, 1000);
        assert_eq!(b.observations, 1000);
        for j in 0..2 {
            assert!(
                (a.coefficients[j] - b.coefficients[j]).abs() <= 1e-13 * a.coefficients[j].abs()
            );
            assert!(
                (a.standard_errors[j] - b.standard_errors[j]).abs() <= 1e-10 * a.standard_errors[j]
            );
        }
        let (ra, rb) = (a.r_squared.unwrap(), b.r_squared.unwrap());
        assert!((ra - rb).abs() < 1e-13);
    }

    #[test]
    fn accumulator_refuses_wrong_width() {
        let mut acc = QrAccumulator::new(2);
        let err = acc.push_row(&[1.0], 1.0, 1.0).unwrap_err();
        assert_eq!(
            err.to_string(),
            "accumulator for 2 parameters cannot take 1"
        );
        let err = acc.merge(QrAccumulator::new(3)).unwrap_err();
        assert_eq!(
            err.to_string(),
            "accumulator for 2 parameters cannot take 3"
        );
    }

    #[test]
    fn dot2_recovers_cancelled_sum() {
        // 1e16 + 1 − 1e16 is 1 exactly; plain summation gives 0.
        let mut acc = Dot2::default();
        acc.add(1e16);
        acc.add(1.0);
        acc.add(-1e16);
        assert_eq!(acc.value(), 1.0);
    }
}
