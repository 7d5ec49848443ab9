//! A model `I = K·g(D, t)` whose scale `K = n·C` enters linearly, fitted by variable
//! projection: for each `D` the best `K` is closed form, so the solver searches `D` alone and
//! `K` with the full 2 × 2 covariance follows at the solution.
//!
//! Variable projection: G. H. Golub & V. Pereyra, "The differentiation of pseudo-inverses and
//! nonlinear least squares problems whose variables separate", SIAM J. Numer. Anal. 10 (1973)
//! 413. With one linear parameter the projected residual is `r(D) = y − K(D)·g(D)`,
//! `K(D) = Σg·y/Σg²`, and its exact derivative is `−(K·g′ + K′·g)` with
//! `K′ = (Σg′·y − 2K·Σg·g′)/Σg²`; every quantity the solver needs is a handful of sums over
//! the points, made in one pass per trial `D`.

use std::cell::{Cell, RefCell};

use nalgebra::{DMatrix, DVector};

use crate::FitError;
use crate::lanes::{lane_sums, lane_total};
use crate::models::common::{
    LAGS, LagSums, Solved, TwoByTwo, noise_by_lags, two_parameter_sandwich,
};
use crate::solver::{LeastSquaresProblem, NonlinearFit, SolveOptions, minimise};

/// Below this many points a pass runs on one thread. Measured with `benches/microdisk.rs` on
/// the shared two-core machine (10⁵ points, another engineer's builds running): passes split
/// over two threads made the fit slower (criterion median 11.8 ms against 5.1 ms on one
/// thread), because the second thread waits for a core; the split is kept for transients long
/// enough that a pass dwarfs that wait (the threshold itself is not measured).
const PARALLEL_MIN: usize = 500_000;

/// Points of the strided sample the start grid runs on.
const START_POINTS: usize = 500;

/// Residuals buffered for the lagged sums.
const BLOCK: usize = 256;

/// Up to this many points each pass keeps its shape values `g` (8 bytes a point, a third of
/// what the transient's own columns and t^-½ hold), so that the residual passes at the solution
/// need no shape evaluation; longer transients evaluate the shape again.
const STORE_MAX: usize = 1 << 22;

/// The sums of one pass at a given `D`: `Σ(y − K₀g)²` for the reference scale `K₀`, `Σg²`,
/// `Σg·y`, `Σg′·y`, `Σg·g′` and `Σg′²`.
#[derive(Debug, Clone, Copy, Default)]
struct Sums {
    rss_ref: f64,
    gg: f64,
    gy: f64,
    dy: f64,
    gd: f64,
    dd: f64,
}

impl Sums {
    fn add(self, o: Sums) -> Sums {
        Sums {
            rss_ref: self.rss_ref + o.rss_ref,
            gg: self.gg + o.gg,
            gy: self.gy + o.gy,
            dy: self.dy + o.dy,
            gd: self.gd + o.gd,
            dd: self.dd + o.dd,
        }
    }
}

/// The projected problem at one `D`.
#[derive(Debug, Clone, Copy)]
struct Projected {
    /// The best scale `K(D)`.
    k: f64,
    /// The sums of the pass.
    sums: Sums,
    /// The residual sum of squares at `(D, K(D))`.
    rss: f64,
    /// `JᵀJ` and `Jᵀr` of the projected residual (one column, `∂r/∂D`).
    jtj: f64,
    jtr: f64,
}

/// `I = K·g(D, xᵢ)` on per-point abscissae `xᵢ` chosen by the model (so that what does not
/// depend on `D`, such as `t^-½`, is computed once); `shape(D, x)` returns `(g, ∂g/∂D)`.
///
/// To argmin's Levenberg–Marquardt solver the projected problem is presented compressed: at
/// each `D` the residual vector is `[Jᵀr/‖J‖, ‖r − J·Jᵀr/‖J‖²‖]` and the Jacobian `[‖J‖, 0]ᵀ`,
/// the rotation by an orthogonal `Q` (first column `J/‖J‖`) of the full `m`-point problem. Moré's
/// algorithm uses the residuals only through their norm and `Qᵀr`, and the Jacobian only
/// through its `R` factor and column norms, all of which the rotation keeps; so it takes the
/// same steps as on the 10⁵ rows, without storing them.
pub(crate) struct ProjectedByNc<'a, G: Fn(f64, f64) -> (f64, f64) + Sync> {
    x: &'a [f64],
    y: &'a [f64],
    shape: G,
    /// The reference scale for the next pass: the last `K(D)` found.
    k_ref: Cell<f64>,
    /// The last few passes, by the bits of `D`: the solver asks for the Jacobian at a point
    /// whose residuals it has already seen.
    memo: RefCell<Vec<(u64, Option<Projected>)>>,
    /// The shape values `g` of the last pass and the bits of its `D` (empty beyond
    /// `STORE_MAX` points).
    stored: RefCell<(u64, Vec<f64>)>,
    passes: Cell<u64>,
}

impl<'a, G: Fn(f64, f64) -> (f64, f64) + Sync> ProjectedByNc<'a, G> {
    pub fn new(x: &'a [f64], y: &'a [f64], shape: G) -> Self {
        Self {
            x,
            y,
            shape,
            k_ref: Cell::new(0.0),
            memo: RefCell::new(Vec::new()),
            stored: RefCell::new((0, Vec::new())),
            passes: Cell::new(0),
        }
    }

    /// The sums over every point, on two threads for long transients.
    fn sums(&self, d: f64, k0: f64) -> Sums {
        let m = self.x.len();
        self.passes.set(self.passes.get() + 1);
        let shape = &self.shape;
        let mut stored = self.stored.borrow_mut();
        let (key, g) = &mut *stored;
        if m <= STORE_MAX {
            g.resize(m, 0.0);
            *key = d.to_bits();
        }
        let store = (m <= STORE_MAX).then_some(&mut g[..]);
        if !parallel(m) {
            return sums_over(shape, self.x, self.y, d, k0, store);
        }
        let half = m / 2;
        let (x1, x2) = self.x.split_at(half);
        let (y1, y2) = self.y.split_at(half);
        let (g1, g2) = match store {
            Some(g) => {
                let (a, b) = g.split_at_mut(half);
                (Some(a), Some(b))
            }
            None => (None, None),
        };
        std::thread::scope(|scope| {
            let other = scope.spawn(|| sums_over(shape, x2, y2, d, k0, g2));
            let first = sums_over(shape, x1, y1, d, k0, g1);
            match other.join() {
                Ok(second) => first.add(second),
                Err(p) => std::panic::resume_unwind(p),
            }
        })
    }

    /// The projected problem at `D` (`None` where the model is undefined).
    fn at(&self, d: f64) -> Option<Projected> {
        let key = d.to_bits();
        if let Some((_, p)) = self.memo.borrow().iter().find(|(k, _)| *k == key) {
            return *p;
        }
        let p = if d > 0.0 && d.is_finite() {
            let k0 = self.k_ref.get();
            let s = self.sums(d, k0);
            let k = s.gy / s.gg;
            // Σ(y − K₀g)² = RSS + (K − K₀)²·Σg², because Σ g·r = 0 at K(D): with K₀ the last
            // K this keeps the digits that Σy² − (Σgy)²/Σg² would lose.
            let rss = (s.rss_ref - (k - k0) * (k - k0) * s.gg).max(0.0);
            let k1 = (s.dy - 2.0 * k * s.gd) / s.gg;
            let jtj = k * k * s.dd + 2.0 * k * k1 * s.gd + k1 * k1 * s.gg;
            let jtr = -k * (s.dy - k * s.gd);
            let ok = [k, rss, jtj, jtr].iter().all(|v| v.is_finite()) && s.gg > 0.0 && jtj > 0.0;
            if ok {
                self.k_ref.set(k);
            }
            ok.then_some(Projected {
                k,
                sums: s,
                rss,
                jtj,
                jtr,
            })
        } else {
            None
        };
        let mut memo = self.memo.borrow_mut();
        if memo.len() >= 4 {
            memo.remove(0);
        }
        memo.push((key, p));
        p
    }

    /// Starting `D` and `K`: the best on a log grid from 1e-14 to 1e-6 m²/s at 40 per decade, each
    /// with its least-squares `K`, on about 500 evenly strided points. The grid is searched
    /// coarse to fine: every tenth value first, then the 40-per-decade values within one coarse
    /// step of the best (the same grid minimum whenever the cost is unimodal at the coarse
    /// scale, for an eighth of the evaluations), then refined by a parabola through the best
    /// three.
    fn start(&self) -> (f64, f64) {
        let stride = (self.x.len() / START_POINTS).max(1);
        let xs: Vec<f64> = self.x.iter().step_by(stride).copied().collect();
        let ys: Vec<f64> = self.y.iter().step_by(stride).copied().collect();
        let yy = ys.iter().fold(0.0, |acc, y| acc + y * y);
        // The shape over a block of the sample first (a plain map, which the compiler
        // vectorises), then the sums in order.
        let cost = |d: f64| {
            let (mut gg, mut gy) = (0.0, 0.0);
            let mut gb = [0.0f64; BLOCK];
            for (xs, ys) in xs.chunks(BLOCK).zip(ys.chunks(BLOCK)) {
                let gs = &mut gb[..xs.len()];
                for (g, &x) in gs.iter_mut().zip(xs) {
                    *g = (self.shape)(d, x).0;
                }
                for (&g, &y) in gs.iter().zip(ys) {
                    gg += g * g;
                    gy += g * y;
                }
            }
            if gg > 0.0 {
                (yy - gy * gy / gg, gy / gg)
            } else {
                (f64::INFINITY, 0.0)
            }
        };
        let (a, b) = (1e-14f64.ln(), 1e-6f64.ln());
        let steps = 320;
        let at = |k: usize| (a + (b - a) * k as f64 / steps as f64).exp();
        let mut best = (f64::INFINITY, 0, 0.0);
        for k in (0..=steps).step_by(10) {
            let (c, scale) = cost(at(k));
            if c < best.0 {
                best = (c, k, scale);
            }
        }
        let centre = best.1;
        let lo = centre.saturating_sub(10);
        let hi = (centre + 10).min(steps);
        let mut fine = vec![(f64::INFINITY, 0.0); hi - lo + 1];
        for k in lo..=hi {
            fine[k - lo] = if k == centre {
                (best.0, best.2)
            } else {
                cost(at(k))
            };
            if fine[k - lo].0 < best.0 {
                best = (fine[k - lo].0, k, fine[k - lo].1);
            }
        }
        // A parabola in ln D through the best grid value and its neighbours, kept when it
        // lowers the cost: the solver then starts within a fraction of a grid step.
        let k = best.1;
        if k > lo && k < hi {
            let (cm, c0, cp) = (fine[k - 1 - lo].0, fine[k - lo].0, fine[k + 1 - lo].0);
            let curvature = cm - 2.0 * c0 + cp;
            if curvature > 0.0 {
                let offset = (0.5 * (cm - cp) / curvature).clamp(-1.0, 1.0);
                let d = (a + (b - a) * (k as f64 + offset) / steps as f64).exp();
                let (c, scale) = cost(d);
                if c < best.0 {
                    return (d, scale);
                }
            }
        }
        (at(best.1), best.2)
    }

    /// Fits `[D, K]`: the start grid, Levenberg–Marquardt on the projected problem in `D` to a
    /// relative reduction of the sum of squares of 1e-10 or until the residuals are orthogonal
    /// to the Jacobian within a cosine of 1e-6 (MINPACK's gtol test, made where the solver
    /// stands, before a trial step: the Gauss–Newton step from there would lower the sum of
    /// squares by less than 1e-12 of it), one Gauss–Newton step from there unless it would
    /// change nothing by that same measure (which the quadratic convergence near the minimum
    /// makes as good as the tolerances of 1e-15 would), then `K(D)`, `s²·(JᵀJ)⁻¹` and the
    /// sandwich covariance for white plus AR(1) noise with the full two-column Jacobian at the
    /// solution.
    pub fn solve(&self) -> Result<Solved, FitError> {
        let m = self.x.len();
        if m <= 2 {
            return Err(FitError::TooFewPoints {
                points: m,
                parameters: 2,
            });
        }
        let undefined = || FitError::RankDeficient {
            column: 0,
            rank: 0,
            parameters: 2,
            condition_number: f64::INFINITY,
        };
        // The sample's best scale is the reference for the first pass.
        let (d0, k0) = self.start();
        self.k_ref.set(k0);
        let options = SolveOptions {
            ftol: 1e-10,
            xtol: 1e-10,
            // cos² = (Jᵀr)²/(JᵀJ·‖r‖²) is the Gauss–Newton gain over the sum of squares, so this
            // stops exactly where the step below would be skipped, without a pass to find out.
            gtol: 1e-6,
            ..SolveOptions::default()
        };
        let run = minimise(self, DVector::from_element(1, d0), &options)?;
        let d_lm = run.parameters[0];
        let lm = self.at(d_lm).ok_or_else(undefined)?;
        let d_gn = d_lm - lm.jtr / lm.jtj;
        // The Gauss–Newton step lowers the sum of squares by (Jᵀr)²/JᵀJ in its linear model;
        // below 1e-12 of it (a step of about √(1e-12·m) standard errors, 3e-4 at 10⁵ points)
        // the solver's point is kept and the pass saved. Rounding can make the step useless,
        // never worse than the solver's point.
        let gain = lm.jtr * lm.jtr / lm.jtj;
        let stepped = gain > 1e-12 * lm.rss;
        let (d, last) = match stepped.then(|| self.at(d_gn)).flatten() {
            Some(gn) if gn.rss <= lm.rss * (1.0 + 1e-12) => (d_gn, gn),
            _ => (d_lm, lm),
        };
        let (k, sums) = (last.k, last.sums);
        // The residuals once more, for their sum of squares and autocorrelation (the lags past
        // the first only when the first shows correlation).
        let (rss, noise) = noise_by_lags(
            m,
            || self.residual_pass::<1>(d, k),
            || self.residual_pass::<LAGS>(d, k),
        );
        // JᵀJ of the two-parameter problem, rows (−K·g′, −g).
        let a = [k * k * sums.dd, k * sums.gd, sums.gg];
        let TwoByTwo {
            inv,
            dof,
            s2,
            cov,
            c,
        } = TwoByTwo::of(a, rss, m).ok_or_else(undefined)?;
        let fit = NonlinearFit {
            parameters: vec![d, k],
            standard_errors: vec![cov[0][0].sqrt(), cov[1][1].sqrt()],
            covariance: cov.iter().map(|r| r.to_vec()).collect(),
            residual_sum_of_squares: rss,
            residual_standard_deviation: s2.sqrt(),
            degrees_of_freedom: dof,
            observations: m,
            // A Gauss–Newton step taken counts as one more iteration.
            iterations: run.iterations + u64::from(stepped),
            residual_evaluations: self.passes.get(),
            jacobian_evaluations: run.jacobian_evaluations + 1,
            termination: run.termination,
            condition_number: ((1.0 + c) / (1.0 - c)).sqrt(),
        };
        // One more pass over the data, only for correlated residuals.
        let covariance = two_parameter_sandwich(
            a,
            inv,
            s2,
            noise,
            self.x,
            |x| {
                let (g, dg) = (self.shape)(d, x);
                [-k * dg, -g]
            },
            || self.passes.set(self.passes.get() + 1),
        );
        Ok(Solved {
            fit,
            covariance,
            noise,
            dof: (noise.effective_points(m) - 2.0).max(1.0),
        })
    }

    /// The residuals at `(D, K)`: their sum of squares and lagged sums of the first `L` lags,
    /// on two threads for long transients.
    fn residual_pass<const L: usize>(&self, d: f64, k: f64) -> LagSums<L> {
        self.passes.set(self.passes.get() + 1);
        let shape = &self.shape;
        let stored = self.stored.borrow();
        let m = self.x.len();
        // The last pass's g when it was at this D (the same numbers the shape would give).
        let g = (stored.0 == d.to_bits() && stored.1.len() == m).then_some(&stored.1[..]);
        let part = |from: usize, to: usize| {
            let (x, y) = (&self.x[from..to], &self.y[from..to]);
            let mut lags = LagSums::new();
            let mut buf = [0.0f64; BLOCK];
            for (j, (xs, ys)) in x.chunks(BLOCK).zip(y.chunks(BLOCK)).enumerate() {
                let block = &mut buf[..xs.len()];
                match g {
                    Some(g) => {
                        let gs = &g[from + j * BLOCK..][..xs.len()];
                        for ((r, &g), &y) in block.iter_mut().zip(gs).zip(ys) {
                            *r = y - k * g;
                        }
                    }
                    None => {
                        for ((r, &x), &y) in block.iter_mut().zip(xs).zip(ys) {
                            *r = y - k * shape(d, x).0;
                        }
                    }
                }
                lags.extend(block);
            }
            lags
        };
        if !parallel(m) {
            return part(0, m);
        }
        let half = m / 2;
        let (lags1, lags2) = std::thread::scope(|scope| {
            let other = scope.spawn(|| part(half, m));
            let first = part(0, half);
            match other.join() {
                Ok(second) => (first, second),
                Err(p) => std::panic::resume_unwind(p),
            }
        });
        match lags1.join(&lags2) {
            Some(lags) => lags,
            // Not reached: both halves of a parallel pass are long.
            None => part(0, m),
        }
    }
}

/// Whether a pass over `m` points is split over two threads.
fn parallel(m: usize) -> bool {
    m >= PARALLEL_MIN && std::thread::available_parallelism().map_or(1, usize::from) >= 2
}

/// One pass of the sums over the points `x`, `y` at `D`, with the reference scale `k0`; the
/// shape values `g` are left in `store` when one is given.
fn sums_over<G: Fn(f64, f64) -> (f64, f64)>(
    shape: &G,
    x: &[f64],
    y: &[f64],
    d: f64,
    k0: f64,
    mut store: Option<&mut [f64]>,
) -> Sums {
    // The shape over a block of points first (a plain map, which the compiler vectorises),
    // then each sum in its own four-lane loop over the block: one loop updating all six sums
    // compiled to shuffles between half-filled vectors and was slower.
    let mut acc = [[0.0f64; 4]; 6];
    let mut gb = [0.0f64; BLOCK];
    let mut db = [0.0f64; BLOCK];
    for (j, (xs, ys)) in x.chunks(BLOCK).zip(y.chunks(BLOCK)).enumerate() {
        let n = xs.len();
        let g = match store.as_deref_mut() {
            Some(s) => &mut s[j * BLOCK..][..n],
            None => &mut gb[..n],
        };
        let dg = &mut db[..n];
        for ((g, dg), &x) in g.iter_mut().zip(dg.iter_mut()).zip(xs) {
            (*g, *dg) = shape(d, x);
        }
        let (g, dg) = (&*g, &*dg);
        lane_sums(&mut acc[0], g, ys, |g, y| {
            let r = y - k0 * g;
            r * r
        });
        lane_sums(&mut acc[1], g, g, |g, _| g * g);
        lane_sums(&mut acc[2], g, ys, |g, y| g * y);
        lane_sums(&mut acc[3], dg, ys, |dg, y| dg * y);
        lane_sums(&mut acc[4], g, dg, |g, dg| g * dg);
        lane_sums(&mut acc[5], dg, dg, |dg, _| dg * dg);
    }
    let [rss_ref, gg, gy, dy, gd, dd] = acc.map(lane_total);
    Sums {
        rss_ref,
        gg,
        gy,
        dy,
        gd,
        dd,
    }
}

impl<G: Fn(f64, f64) -> (f64, f64) + Sync> LeastSquaresProblem for ProjectedByNc<'_, G> {
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
        match self.at(p[0]) {
            Some(q) => {
                let along = q.jtr / q.jtj.sqrt();
                DVector::from_vec(vec![along, (q.rss - along * along).max(0.0).sqrt()])
            }
            None => DVector::from_element(2, f64::NAN),
        }
    }

    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
        match self.at(p[0]) {
            Some(q) => DMatrix::from_column_slice(2, 1, &[q.jtj.sqrt(), 0.0]),
            None => DMatrix::from_element(2, 1, f64::NAN),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::common::{ScaledByNc, Transient};

    /// `I = K·g(D, t)` with the planar-plus-steady-state shape `g = D·(1 + 0.5·r/√(D·t))`
    /// (a made-up shape with the disk's structure, for the comparison only), on 3000 points
    /// on `n` points with a little deterministic noise, white or AR(1) with coefficient `phi`.
    fn transient(n: u32, phi: f64) -> (Vec<f64>, Vec<f64>) {
        let (d, k) = (7.8e-10, 1.3e9);
        let t: Vec<f64> = (1..=n).map(|i| f64::from(i) * 3.0 / f64::from(n)).collect();
        let mut state = 0x2545_f491_4f6c_dd1d_u64;
        let mut e = 0.0;
        let y = t
            .iter()
            .map(|&t| {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                let u = (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
                e = phi * e + u;
                k * d * (1.0 + 0.5 * 5e-6 / (d * t).sqrt()) * (1.0 + 1e-3 * e)
            })
            .collect();
        (t, y)
    }

    #[test]
    fn projected_fit_matches_the_two_parameter_fit() {
        // Reference: the two-parameter Levenberg–Marquardt of `ScaledByNc` (tolerances 1e-15,
        // no projection) on the same model and data; short and long (two threads), white and
        // correlated noise (the sandwich pass).
        for (n, phi) in [(3000, 0.0), (3000, 0.8), (600_000, 0.0), (600_000, 0.8)] {
            compare(n, phi);
        }
    }

    #[test]
    fn residuals_from_the_stored_shape_are_those_of_the_shape() {
        // The residual pass reads g from the last sums pass when it was at the same D; the
        // numbers must be those of evaluating the shape again, bit for bit, on one thread and
        // on two.
        for n in [3000, 600_000] {
            let (t, y) = transient(n, 0.8);
            let u: Vec<f64> = t.iter().map(|t| 1.0 / t.sqrt()).collect();
            let problem = ProjectedByNc::new(&u, &y, |d: f64, u: f64| {
                let s = 0.5 * 5e-6 / d.sqrt() * u;
                (d * (1.0 + s), 1.0 + 0.5 * s)
            });
            let d = 7.9e-10;
            let k = problem.at(d).expect("defined").k;
            assert_eq!(problem.stored.borrow().0, d.to_bits());
            let from_store = problem.residual_pass::<LAGS>(d, k);
            problem.stored.borrow_mut().1.clear();
            let recomputed = problem.residual_pass::<LAGS>(d, k);
            let bits = |l: &LagSums| {
                let mut v: Vec<u64> = l.finish().iter().map(|x| x.to_bits()).collect();
                v.push(l.sum_of_squares().to_bits());
                v
            };
            assert_eq!(bits(&from_store), bits(&recomputed), "n = {n}");
        }
    }

    fn compare(n: u32, phi: f64) {
        let (t, y) = transient(n, phi);
        let full = ScaledByNc {
            data: Transient {
                time_s: &t,
                current_a: &y,
            },
            shape: |d: f64, t: f64| {
                let s = 0.5 * 5e-6 / (d * t).sqrt();
                // ∂/∂D of D·(1 + s) with s ∝ D^-½.
                (d * (1.0 + s), 1.0 + 0.5 * s)
            },
        }
        .solve()
        .expect("two-parameter fit");
        let u: Vec<f64> = t.iter().map(|t| 1.0 / t.sqrt()).collect();
        let projected = ProjectedByNc::new(&u, &y, |d: f64, u: f64| {
            let s = 0.5 * 5e-6 / d.sqrt() * u;
            (d * (1.0 + s), 1.0 + 0.5 * s)
        })
        .solve()
        .expect("projected fit");
        for j in 0..2 {
            let (a, b) = (full.value(j), projected.value(j));
            assert!(
                (a / b - 1.0).abs() < 1e-9,
                "{n} {phi} parameter {j}: {a} vs {b}"
            );
            let (a, b) = (full.se(j), projected.se(j));
            assert!(
                (a / b - 1.0).abs() < 1e-6,
                "{n} {phi} standard error {j}: {a} vs {b}"
            );
        }
        let (a, b) = (
            full.fit.residual_sum_of_squares,
            projected.fit.residual_sum_of_squares,
        );
        assert!((a / b - 1.0).abs() < 1e-12, "{n} {phi}: {a} vs {b}");
        assert!((full.noise.c - projected.noise.c).abs() < 1e-9, "{n} {phi}");
        assert!(
            (full.noise.phi - projected.noise.phi).abs() < 1e-9,
            "{n} {phi}"
        );
        if phi > 0.0 {
            assert!(
                projected.noise.c > 0.0,
                "{n}: the correlated case must take the sandwich"
            );
        }
    }
}
