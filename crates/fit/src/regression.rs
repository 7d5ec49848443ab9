//! The Cottrell line: least squares of the current on a transformed time (t^-½ or the
//! interval-averaged form), with or without an intercept, on windows of up to tens of millions
//! of samples.
//!
//! The solve uses two-pass centred sums (the numerically stable way to fit one regressor:
//! T. F. Chan, G. H. Golub & R. J. LeVeque, Amer. Statist. 37 (1983) 242), split across threads
//! for long windows; the tests check it against the QR solve of [`crate::linalg::lstsq`] on NIST
//! StRD Norris and on Cottrell data.
//!
//! The covariance is a sandwich estimate that stays honest for design weights and for
//! autocorrelated noise: with residual variance s², weights w and design rows zᵢ = wᵢ·[1, x̃ᵢ],
//! `Cov = s²·A⁻¹·M·A⁻¹`, A = Σ wᵢ[1, x̃ᵢ][1, x̃ᵢ]ᵀ, M = Σᵢ Σⱼ zᵢ zⱼᵀ φ^|i−j|, the variance of a
//! linear estimator under correlated errors (e.g. G. E. P. Box, G. M. Jenkins & G. C. Reinsel,
//! *Time Series Analysis*, ch. 3). The noise is modelled as white noise plus a first-order
//! autoregressive (AR(1)) part, whose autocorrelation is ρ(0) = 1, ρ(k) = c·φ^k for k ≥ 1
//! (c is the AR part's share of the variance); c and φ come from the residuals' autocorrelation
//! at lags 1–10 (ln ρ(k) against k). Then M = (1 − c)·M₀ + c·M_φ, where M_φ is summed in one pass
//! by the recursion hᵢ = φ·(hᵢ₋₁ + zᵢ₋₁). Pure AR(1) noise gives c = 1, white noise c = 0.

use serde::Serialize;

use crate::FitError;
use crate::lanes::lane_sums;

/// How time is turned into the regressor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum Regressor {
    /// x = t^-½: the Cottrell current at the sampling instant.
    InverseSqrt,
    /// x = 2(√tᵢ − √tᵢ₋₁)/(tᵢ − tᵢ₋₁): the mean Cottrell current over each sampling interval,
    /// for instruments that report interval averages. `t_before_s` is the time of the sample
    /// before the window's first one (0 when the first sample follows the step).
    IntervalAverage {
        /// Time of the sample before the window, in s.
        t_before_s: f64,
    },
}

/// How points are weighted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Weighting {
    /// Every point counts the same.
    #[default]
    Ordinary,
    /// Each point is weighted by the share of ln t it covers, (tᵢ₊₁ − tᵢ₋₁)/(2tᵢ), so that every
    /// decade of time counts equally and the many long-time points of a uniformly sampled trace
    /// do not dominate. The covariance is the sandwich form, valid for such design weights.
    LogTime,
}

impl Weighting {
    /// A sentence stating the scheme, for results and reports.
    pub fn description(self) -> &'static str {
        match self {
            Weighting::Ordinary => "ordinary least squares: every point weighted equally",
            Weighting::LogTime => {
                "log-time weights: each point weighted by the share of ln t it covers, (t[i+1] − t[i−1])/(2·t[i]), so each decade of time counts equally; sandwich covariance"
            }
        }
    }
}

/// The fitted line and its diagnostics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LineFit {
    /// Slope S in A·s^½ (current per unit of the regressor).
    pub slope: f64,
    /// Intercept b in A, when fitted.
    pub intercept: Option<f64>,
    /// Covariance of (slope, intercept) or of (slope) alone, corrected for autocorrelation.
    pub covariance: Vec<Vec<f64>>,
    /// Covariance as plain least squares would give it (no autocorrelation correction).
    pub covariance_uncorrected: Vec<Vec<f64>>,
    /// Residual standard deviation in A (unweighted residuals, n − p degrees of freedom).
    pub residual_sd: f64,
    /// Points in the fit.
    pub points: usize,
    /// Parameters fitted.
    pub parameters: usize,
    /// Coefficient of determination (weighted, centred when there is an intercept).
    pub r_squared: f64,
    /// Lag-1 autocorrelation of the residuals.
    pub lag1_autocorrelation: f64,
    /// Durbin–Watson statistic of the residuals (J. Durbin & G. S. Watson, Biometrika 37 (1950)
    /// 409); near 2 for independent noise, towards 0 for positive autocorrelation.
    pub durbin_watson: f64,
    /// Wald–Wolfowitz runs-test z of the residual signs (A. Wald & J. Wolfowitz, Ann. Math.
    /// Statist. 11 (1940) 147); strongly negative means too few sign changes: structure.
    pub runs_z: f64,
    /// The noise model used in the covariance.
    pub noise: NoiseModel,
    /// Effective number of independent points, n/(1 + 2·Σ ρ(k)) = n/(1 + 2cφ/(1 − φ)) (the
    /// effective sample size of a mean of correlated data; G. V. Bayley & J. M. Hammersley,
    /// J. R. Statist. Soc. Suppl. 8 (1946) 184).
    pub effective_points: f64,
    /// Degrees of freedom for Student's t: effective points minus parameters (at least 1).
    pub degrees_of_freedom: f64,
}

impl LineFit {
    /// Standard error of the slope (autocorrelation-corrected), in A·s^½.
    pub fn slope_std_error(&self) -> f64 {
        self.covariance[0][0].sqrt()
    }

    /// Standard error of the intercept (autocorrelation-corrected), in A.
    pub fn intercept_std_error(&self) -> Option<f64> {
        self.intercept.map(|_| self.covariance[1][1].sqrt())
    }
}

/// Correlation of the noise: white plus AR(1), ρ(k) = c·φ^k for lags k ≥ 1.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct NoiseModel {
    /// Share of the variance in the correlated (AR(1)) part, 0–1.
    pub c: f64,
    /// AR(1) coefficient of that part, 0–0.999.
    pub phi: f64,
}

impl NoiseModel {
    /// Independent noise.
    pub const WHITE: NoiseModel = NoiseModel { c: 0.0, phi: 0.0 };

    /// Estimates c and φ from autocorrelations ρ(1..) of `n` residuals: a least-squares line
    /// through ln ρ(k) for the leading lags whose ρ(k) exceeds 2/√n (significant at about 95 %);
    /// one such lag alone gives pure AR(1) with φ = ρ(1); none gives white noise.
    pub fn from_autocorrelation(rho: &[f64], n: usize) -> NoiseModel {
        let limit = 2.0 / (n as f64).sqrt();
        let lags: Vec<(f64, f64)> = rho
            .iter()
            .enumerate()
            .take_while(|(_, r)| **r > limit)
            .map(|(k, r)| ((k + 1) as f64, r.ln()))
            .collect();
        match lags.len() {
            0 => NoiseModel::WHITE,
            1 => NoiseModel {
                c: 1.0,
                phi: rho[0].clamp(0.0, 0.999),
            },
            m => {
                let mk = lags.iter().map(|l| l.0).sum::<f64>() / m as f64;
                let ml = lags.iter().map(|l| l.1).sum::<f64>() / m as f64;
                let sxx: f64 = lags.iter().map(|l| (l.0 - mk).powi(2)).sum();
                let sxy: f64 = lags.iter().map(|l| (l.0 - mk) * (l.1 - ml)).sum();
                let phi = (sxy / sxx).exp().clamp(1e-6, 0.999);
                let c = ((ml - mk * (sxy / sxx)).exp()).clamp(0.0, 1.0);
                NoiseModel { c, phi }
            }
        }
    }

    /// Estimates σ², c and φ from the variogram of a residual series, γ(k) = ½·mean((rᵢ₊ₖ − rᵢ)²)
    /// = σ²·(1 − ρ(k)). Differences at short lags ignore the slow misfit a provisional model
    /// leaves (and that a regression would absorb), so this sees a slowly decaying correlation
    /// that the autocorrelation of a short regression's residuals underestimates. σ² is taken
    /// as the mean of γ over the last fifth of lags up to `max_lag`; ρ(k) = 1 − γ(k)/σ² is then
    /// fitted as c·φ^k. Returns (σ, model).
    pub fn from_variogram(residuals: &[f64], max_lag: usize) -> (f64, NoiseModel) {
        let n = residuals.len();
        let max_lag = max_lag.min(n / 4).max(2);
        // Four lags per pass over the residuals: each lag's sum still adds its terms in order,
        // but the four chains of additions run side by side instead of one after another.
        let squares = |k: usize, from: usize, to: usize, sum: f64| {
            (from..to).fold(sum, |acc, i| {
                acc + (residuals[i + k] - residuals[i]).powi(2)
            })
        };
        let mut gamma = vec![0.0; max_lag];
        let mut first = 1;
        while first + 3 <= max_lag {
            let common = n - (first + 3);
            let mut sums = [0.0; 4];
            for i in 0..common {
                for (j, sum) in sums.iter_mut().enumerate() {
                    *sum += (residuals[i + first + j] - residuals[i]).powi(2);
                }
            }
            for (j, sum) in sums.into_iter().enumerate() {
                let k = first + j;
                gamma[k - 1] = squares(k, common, n - k, sum) / (2.0 * (n - k) as f64);
            }
            first += 4;
        }
        for k in first..=max_lag {
            gamma[k - 1] = squares(k, 0, n - k, 0.0) / (2.0 * (n - k) as f64);
        }
        let tail = (max_lag / 5).max(1);
        let sigma2 = gamma[max_lag - tail..].iter().sum::<f64>() / tail as f64;
        if !(sigma2 > 0.0) {
            return (0.0, NoiseModel::WHITE);
        }
        let rho: Vec<f64> = gamma.iter().map(|g| 1.0 - g / sigma2).collect();
        (sigma2.sqrt(), NoiseModel::from_autocorrelation(&rho, n))
    }

    /// The variance of the mean of `k` consecutive samples relative to σ²/k:
    /// 1 + 2·Σⱼ (1 − j/k)·c·φ^j.
    pub fn mean_variance_factor(&self, k: usize) -> f64 {
        let (c, phi) = (self.c, self.phi);
        if c == 0.0 || phi == 0.0 || k < 2 {
            return 1.0;
        }
        let kf = k as f64;
        let geometric = phi / (1.0 - phi) - phi * (1.0 - phi.powf(kf)) / (kf * (1.0 - phi).powi(2));
        1.0 + 2.0 * c * geometric
    }

    /// Effective points among `n`: n/(1 + 2cφ/(1 − φ)).
    pub fn effective_points(&self, n: usize) -> f64 {
        n as f64 / (1.0 + 2.0 * self.c * self.phi / (1.0 - self.phi))
    }
}

/// The sandwich covariance `s²·(JᵀJ)⁻¹·M·(JᵀJ)⁻¹` of a least-squares estimate whose rows of
/// the Jacobian (or design) `j` are in time order, for white plus AR(1) noise: M = (1 − c)·JᵀJ
/// plus c·Σᵢ Σⱼ jᵢ jⱼᵀ φ^|i−j|, the second sum by the recursion hᵢ = φ·(hᵢ₋₁ + jᵢ₋₁).
/// Returns `None` when JᵀJ is singular.
pub fn sandwich_covariance(
    j: &nalgebra::DMatrix<f64>,
    s2: f64,
    noise: NoiseModel,
) -> Option<nalgebra::DMatrix<f64>> {
    let p = j.ncols();
    let jtj = j.transpose() * j;
    let inv = jtj.clone().try_inverse()?;
    let mut middle = jtj * (1.0 - noise.c);
    if noise.c > 0.0 && noise.phi > 0.0 {
        // Plain arrays in the loop: this runs once per row of a long Jacobian.
        let phi = noise.phi;
        let mut h = vec![0.0; p];
        let mut prev = vec![0.0; p];
        let mut z = vec![0.0; p];
        let mut m = vec![0.0; p * p];
        for i in 0..j.nrows() {
            for c in 0..p {
                z[c] = j[(i, c)];
            }
            if i > 0 {
                for c in 0..p {
                    h[c] = phi * (h[c] + prev[c]);
                }
            }
            for r in 0..p {
                for c in 0..p {
                    m[r * p + c] += z[r] * z[c] + z[r] * h[c] + h[r] * z[c];
                }
            }
            prev.copy_from_slice(&z);
        }
        middle += nalgebra::DMatrix::from_row_slice(p, p, &m) * noise.c;
    }
    Some(&inv * middle * &inv * s2)
}

/// [`sandwich_covariance`] for a long Jacobian given row by row (`row(i)` is row i, rows in
/// time order), without building it: the sums run in parallel chunks, each carrying its
/// AR(1) recursion into the next exactly as one sequential pass would. The exact reference for
/// the block-summed onset covariance of the planar analysis.
#[cfg(test)]
pub(crate) fn streamed_sandwich<const P: usize>(
    n: usize,
    row: impl Fn(usize) -> [f64; P] + Sync,
    s2: f64,
    noise: NoiseModel,
) -> Option<nalgebra::DMatrix<f64>> {
    let phi = if noise.c > 0.0 { noise.phi } else { 0.0 };
    // Per chunk: Σ zzᵀ, the AR(1) middle with h starting at zero, G = Σ zᵢ φ^(i−a), the h
    // handed on, and φ^len.
    type Part<const P: usize> = ([[f64; P]; P], [[f64; P]; P], [f64; P], [f64; P], f64);
    let parts: Vec<Part<P>> = chunked(n, |a, b| {
        let mut jtj = [[0.0; P]; P];
        let mut m = [[0.0; P]; P];
        let mut h = [0.0; P];
        let mut g = [0.0; P];
        let mut prev = [0.0; P];
        let mut decay = 1.0;
        for i in a..b {
            let z = row(i);
            if i > a {
                for c in 0..P {
                    h[c] = phi * (h[c] + prev[c]);
                }
            }
            for r in 0..P {
                for c in 0..P {
                    jtj[r][c] += z[r] * z[c];
                    m[r][c] += z[r] * h[c] + h[r] * z[c];
                }
                g[r] += z[r] * decay;
            }
            decay *= phi;
            prev = z;
        }
        let mut h_end = [0.0; P];
        for c in 0..P {
            h_end[c] = phi * (h[c] + prev[c]);
        }
        (jtj, m, g, h_end, decay)
    });
    let mut jtj = nalgebra::DMatrix::<f64>::zeros(P, P);
    let mut m = nalgebra::DMatrix::<f64>::zeros(P, P);
    let mut carry = [0.0; P];
    for (pj, pm, g, h_end, pow_len) in &parts {
        for r in 0..P {
            for c in 0..P {
                jtj[(r, c)] += pj[r][c];
                // A carried-in h adds G·carryᵀ + carry·Gᵀ.
                m[(r, c)] += pm[r][c] + g[r] * carry[c] + carry[r] * g[c];
            }
        }
        for c in 0..P {
            carry[c] = carry[c] * pow_len + h_end[c];
        }
    }
    let inv = jtj.clone().try_inverse()?;
    let middle = &jtj + m * noise.c;
    Some(&inv * middle * &inv * s2)
}

/// Lags of the residual autocorrelation used for the noise model.
const LAGS: usize = 10;
/// Residuals per thread used for the autocorrelation.
const LAG_POINTS: usize = 250_000;

/// The points of a window: times (s, after the step), currents (A, faradaic sign positive).
#[derive(Debug, Clone, Copy)]
pub struct Window<'a> {
    /// Times in s, strictly increasing and positive.
    pub time_s: &'a [f64],
    /// Currents in A.
    pub current_a: &'a [f64],
    /// Time of the sample after the window, if any (for the last log-time weight), in s.
    pub t_after_s: Option<f64>,
    /// Time of the sample before the window, if any, in s.
    pub t_before_s: Option<f64>,
    /// Time origin subtracted from every time (the refined step onset), in s.
    pub t0_s: f64,
}

/// Below this many points the fit runs on one thread.
const PARALLEL_MIN: usize = 200_000;

#[inline]
fn regressor(r: Regressor, t: &[f64], t0: f64, i: usize) -> f64 {
    match r {
        Regressor::InverseSqrt => 1.0 / (t[i] - t0).sqrt(),
        Regressor::IntervalAverage { t_before_s } => {
            let prev = if i == 0 { t_before_s } else { t[i - 1] };
            let (a, b) = ((prev - t0).max(0.0).sqrt(), (t[i] - t0).sqrt());
            // 2(√t − √t₋)/(t − t₋) = 2/(√t + √t₋), which does not cancel.
            2.0 / (a + b)
        }
    }
}

#[inline]
fn weight(w: Weighting, win: &Window<'_>, i: usize) -> f64 {
    match w {
        Weighting::Ordinary => 1.0,
        Weighting::LogTime => {
            let t = win.time_s;
            let n = t.len();
            let before = if i == 0 {
                win.t_before_s
            } else {
                Some(t[i - 1])
            };
            let after = if i + 1 == n {
                win.t_after_s
            } else {
                Some(t[i + 1])
            };
            let ti = t[i] - win.t0_s;
            match (before, after) {
                (Some(b), Some(a)) => (a - b) / (2.0 * ti),
                (None, Some(a)) => (a - t[i]) / ti,
                (Some(b), None) => (t[i] - b) / ti,
                (None, None) => 1.0,
            }
        }
    }
}

/// Runs `f` on contiguous index ranges of `0..n`, one per core for long ranges, on scoped
/// threads; results in order.
pub(crate) fn chunked_ranges<T: Send>(n: usize, f: impl Fn(usize, usize) -> T + Sync) -> Vec<T> {
    chunked(n, f)
}

/// Runs `f` on up to `parts` contiguous index ranges of `0..n` on scoped threads, in order.
fn chunked<T: Send>(n: usize, f: impl Fn(usize, usize) -> T + Sync) -> Vec<T> {
    let parts = if n < PARALLEL_MIN {
        1
    } else {
        std::thread::available_parallelism()
            .map_or(1, usize::from)
            .clamp(1, 8)
    };
    if parts == 1 {
        return vec![f(0, n)];
    }
    let bounds: Vec<(usize, usize)> = (0..parts)
        .map(|k| (n * k / parts, n * (k + 1) / parts))
        .collect();
    std::thread::scope(|scope| {
        let f = &f;
        let handles: Vec<_> = bounds[1..]
            .iter()
            .map(|&(a, b)| scope.spawn(move || f(a, b)))
            .collect();
        let mut out = vec![f(bounds[0].0, bounds[0].1)];
        for h in handles {
            match h.join() {
                Ok(v) => out.push(v),
                Err(p) => std::panic::resume_unwind(p),
            }
        }
        out
    })
}

/// Fits `I = S·x + b` (or `I = S·x`) over the window.
pub fn fit_line(
    win: &Window<'_>,
    regressor_kind: Regressor,
    weighting: Weighting,
    intercept: bool,
) -> Result<LineFit, FitError> {
    let t = win.time_s;
    let y = win.current_a;
    let n = t.len();
    if y.len() != n {
        return Err(FitError::DimensionMismatch {
            what: "current",
            found: y.len(),
            expected: n,
        });
    }
    let p = if intercept { 2 } else { 1 };
    if n <= p + 1 {
        return Err(FitError::TooFewPoints {
            points: n,
            parameters: p,
        });
    }
    let t0 = win.t0_s;
    let x_at = |i| regressor(regressor_kind, t, t0, i);
    let w_at = |i| weight(weighting, win, i);

    // One pass for the moments, on data shifted by means taken from a strided sample: with the
    // shift close to the mean, the shifted sums give the centred moments without the
    // cancellation of raw sums (T. F. Chan, G. H. Golub & R. J. LeVeque, Amer. Statist. 37
    // (1983) 242, "shifted data").
    let stride = (n / 4096).max(1);
    let (mut c0, mut cx, mut cy, mut cxx, mut cxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for i in (0..n).step_by(stride) {
        let (w, x) = (w_at(i), x_at(i));
        c0 += w;
        cx += w * x;
        cy += w * y[i];
        cxx += w * x * x;
        cxy += w * x * y[i];
    }
    let (kx, ky) = if intercept && c0 > 0.0 {
        (cx / c0, cy / c0)
    } else {
        (0.0, 0.0)
    };
    // The strided sample's slope, a guess close to the fitted one: the residual sum of squares
    // is taken from the moments of e = v − guess·u, which are small where the fit is good, so
    // it keeps its digits; Syy − Sxy²/Sxx lost up to eight of them on quiet transients.
    let guess = {
        let (sxx, sxy) = if intercept {
            (cxx - cx * kx, cxy - cx * ky)
        } else {
            (cxx, cxy)
        };
        let g = sxy / sxx;
        if g.is_finite() { g } else { 0.0 }
    };
    // The same pass checks the inputs (the strided means above may have met a bad row; they
    // are not used if so): a separate pass over tens of millions of rows cost as much as the
    // moments themselves.
    let plain = regressor_kind == Regressor::InverseSqrt && weighting == Weighting::Ordinary;
    let raw = chunked(n, |a, b| {
        if plain {
            return plain_moments(&t[a..b], &y[a..b], t0, kx, ky, guess);
        }
        // Σw, Σw·u, Σw·v, Σw·u², Σw·u·v, Σw·v², Σw², Σw²·u, Σw²·u², Σw·e, Σw·u·e, Σw·e² with
        // u = x − kx, v = y − ky, e = v − guess·u.
        let mut m = [0.0; 12];
        let mut valid = true;
        for i in a..b {
            valid &= t[i] > t0 && t[i].is_finite() && y[i].is_finite();
            let w = w_at(i);
            let u = x_at(i) - kx;
            let v = y[i] - ky;
            let wu = w * u;
            m[0] += w;
            m[1] += wu;
            m[2] += w * v;
            m[3] += wu * u;
            m[4] += wu * v;
            m[5] += w * v * v;
            m[6] += w * w;
            m[7] += w * wu;
            m[8] += wu * wu;
            let e = v - guess * u;
            m[9] += w * e;
            m[10] += wu * e;
            m[11] += w * e * e;
        }
        (m, valid)
    });
    if raw.iter().any(|r| !r.1) {
        let row = (0..n)
            .find(|&i| !(t[i] > t0 && t[i].is_finite() && y[i].is_finite()))
            .unwrap_or(0);
        return Err(FitError::NonFiniteInput {
            what: "window (time must be positive, current finite)",
            row,
        });
    }
    let raw: Vec<[f64; 12]> = raw.into_iter().map(|r| r.0).collect();
    let [sw, su, sv, suu, suv, svv, sw2, sw2u, sw2uu, se, sue, see] = sum_arrays(&raw);
    if !(sw > 0.0) {
        return Err(FitError::InvalidWeight { row: 0, weight: sw });
    }
    // Centre exactly: x̄ = kx + Σwu/Σw, and the moments about x̄ follow from those about kx.
    let (xm, ym, moments) = if intercept {
        let (du, dv, de) = (su / sw, sv / sw, se / sw);
        (
            kx + du,
            ky + dv,
            [[
                suu - su * du,
                suv - su * dv,
                svv - sv * dv,
                sw2,
                sw2u - sw2 * du,
                sw2uu - 2.0 * sw2u * du + sw2 * du * du,
                sue - su * de,
                see - se * de,
            ]],
        )
    } else {
        (0.0, 0.0, [[suu, suv, svv, sw2, sw2u, sw2uu, sue, see]])
    };
    let [sxx, sxy, syy, sww, swwx, swwxx, sxe, see] = sum_arrays(&moments);
    if !(sxx > 0.0) {
        return Err(FitError::RankDeficient {
            column: 0,
            rank: p - 1,
            parameters: p,
            condition_number: f64::INFINITY,
        });
    }
    let slope = sxy / sxx;
    let icept = intercept.then_some(ym - slope * xm);

    // Pass 3: residual diagnostics. With equal weights the residual sum of squares follows
    // from the centred moments, RSS = See − Sxe²/Sxx, so the residuals themselves are only
    // visited for the autocorrelation, the Durbin–Watson statistic and the runs test, on the
    // first LAG_POINTS of each thread's part (all of them for windows up to that size). The
    // moment formula loses digits only when the fit is near perfect (RSS < 10⁻⁸·Syy); then,
    // and for design weights, every residual is visited.
    let moment_rss = (see - sxe * sxe / sxx).max(0.0);
    let full = weighting != Weighting::Ordinary || moment_rss < 1e-8 * syy;
    let resid = |i: usize| y[i] - icept.unwrap_or(0.0) - slope * x_at(i);
    let diag = chunked(n, |a, b| {
        let mut d = ResidualSums::default();
        let mut prev = if a > 0 { resid(a - 1) } else { f64::NAN };
        let lag_end = b.min(a + LAG_POINTS);
        // The residuals the lags need, computed first in one loop the compiler packs: rs[j] is
        // residual a − LAGS + j, zero before the first residual (missing ones add nothing).
        let known = a.min(LAGS);
        let mut rs = vec![0.0; LAGS + (lag_end - a)];
        for (j, r) in rs.iter_mut().enumerate().skip(LAGS - known) {
            *r = resid(a + j - LAGS);
        }
        for i in a..lag_end {
            let j = LAGS + (i - a);
            let r = rs[j];
            // recent[k] = residual i − 1 − k.
            let recent = &rs[j - LAGS..j];
            for k in 0..LAGS {
                d.lags[k] += r * recent[LAGS - 1 - k];
            }
            d.lag_rr += r * r;
            if !prev.is_nan() {
                let q = prev;
                d.lag += r * q;
                d.diff += (r - q) * (r - q);
                d.changes += u64::from(r != 0.0 && q != 0.0 && (r > 0.0) != (q > 0.0));
            }
            d.pos += u64::from(r > 0.0);
            d.neg += u64::from(r < 0.0);
            prev = r;
        }
        if full {
            for i in a..b {
                let r = if i < lag_end {
                    rs[LAGS + (i - a)]
                } else {
                    resid(i)
                };
                d.rr += r * r;
                d.wrr += w_at(i) * r * r;
            }
        }
        d
    });
    let mut d = diag.iter().fold(ResidualSums::default(), ResidualSums::add);
    if !full {
        d.rr = moment_rss;
        d.wrr = moment_rss;
    }
    let dof_plain = (n - p) as f64;
    let s2 = d.rr / dof_plain;
    let rho = if d.lag_rr > 0.0 {
        d.lag / d.lag_rr
    } else {
        0.0
    };
    let dw = if d.lag_rr > 0.0 {
        d.diff / d.lag_rr
    } else {
        f64::NAN
    };
    let runs_z = runs_test_z(d.changes + 1, d.pos, d.neg);
    let r_squared = if intercept {
        1.0 - d.wrr / syy
    } else {
        1.0 - d.wrr / syy.max(f64::MIN_POSITIVE)
    };

    // Covariance: sandwich with the AR(1) middle, once with φ = 0 and once with φ̂.
    let rho_k: Vec<f64> = if d.lag_rr > 0.0 {
        d.lags.iter().map(|l| l / d.lag_rr).collect()
    } else {
        vec![0.0; LAGS]
    };
    let noise = NoiseModel::from_autocorrelation(&rho_k, n.min(LAG_POINTS * 8));
    let phi = noise.phi;
    let middle = |phi: f64| -> [f64; 3] {
        // z = w·[1, x̃] (with intercept) or w·[x] (without); sum z zᵀ φ^|i−j|.
        let parts = chunked(n, |a, b| {
            // Local sums with h starting at zero, plus G = Σ zᵢ φ^(i−a), which says what a
            // nonzero h carried in from the previous part adds.
            let mut m = [0.0; 3];
            let mut h = [0.0; 2];
            let mut g = [0.0; 2];
            let mut decay = 1.0;
            let mut prev_z = [0.0; 2];
            for i in a..b {
                let w = w_at(i);
                let z = if intercept {
                    [w, w * (x_at(i) - xm)]
                } else {
                    [w * x_at(i), 0.0]
                };
                if i > a {
                    h = [phi * (h[0] + prev_z[0]), phi * (h[1] + prev_z[1])];
                }
                m[0] += z[0] * z[0] + 2.0 * z[0] * h[0];
                m[1] += z[0] * z[1] + z[0] * h[1] + h[0] * z[1];
                m[2] += z[1] * z[1] + 2.0 * z[1] * h[1];
                g[0] += z[0] * decay;
                g[1] += z[1] * decay;
                decay *= phi;
                prev_z = z;
            }
            // The local h handed to the next part, and φ^len for the carried-in one.
            let h_end = [phi * (h[0] + prev_z[0]), phi * (h[1] + prev_z[1])];
            (m, g, h_end, decay)
        });
        // Combine in order: a carried-in h (= c) adds G·cᵀ + c·Gᵀ to the middle.
        let mut total = [0.0; 3];
        let mut carry = [0.0; 2];
        for (m, g, h_end, pow_len) in &parts {
            total[0] += m[0] + 2.0 * carry[0] * g[0];
            total[1] += m[1] + carry[0] * g[1] + carry[1] * g[0];
            total[2] += m[2] + 2.0 * carry[1] * g[1];
            carry = [carry[0] * pow_len + h_end[0], carry[1] * pow_len + h_end[1]];
        }
        total
    };
    let cov_from = |m: [f64; 3]| -> Vec<Vec<f64>> {
        if intercept {
            // Centred basis: A = diag(sw, sxx).
            let v_ac = s2 * m[0] / (sw * sw);
            let c_ab = s2 * m[1] / (sw * sxx);
            let v_b = s2 * m[2] / (sxx * sxx);
            // Back to (slope, intercept) with intercept = a_c − slope·x̄.
            let v_a = v_ac + xm * xm * v_b - 2.0 * xm * c_ab;
            let c_sa = c_ab - xm * v_b;
            vec![vec![v_b, c_sa], vec![c_sa, v_a]]
        } else {
            vec![vec![s2 * m[0] / (sxx * sxx)]]
        }
    };
    // The white-noise middle Σ zzᵀ is already in the second moments.
    let m0 = if intercept {
        [sww, swwx, swwxx]
    } else {
        [swwxx, 0.0, 0.0]
    };
    let covariance_uncorrected = cov_from(m0);
    let covariance = if noise.c > 0.0 && phi > 0.0 {
        let mp = middle(phi);
        let c = noise.c;
        cov_from([
            (1.0 - c) * m0[0] + c * mp[0],
            (1.0 - c) * m0[1] + c * mp[1],
            (1.0 - c) * m0[2] + c * mp[2],
        ])
    } else {
        covariance_uncorrected.clone()
    };
    let effective_points = noise.effective_points(n);
    Ok(LineFit {
        slope,
        intercept: icept,
        covariance,
        covariance_uncorrected,
        residual_sd: s2.sqrt(),
        points: n,
        parameters: p,
        r_squared,
        lag1_autocorrelation: rho,
        durbin_watson: dw,
        runs_z,
        noise,
        effective_points,
        degrees_of_freedom: (effective_points - p as f64).max(1.0),
    })
}

/// The moment sums of [`fit_line`]'s pass for x = (t − t0)^-½ and unit weights, in the same
/// order (Σw, Σu, Σv, Σu², Σuv, Σv², Σw², Σw·u, Σw·u², Σe, Σue, Σe² with u = x − kx,
/// v = y − ky, e = v − guess·u), and whether every time is after t0 and finite and every current
/// finite.
///
/// The regressor, u and e are computed a block of rows at a time into buffers, loops the
/// compiler packs, and each sum then runs over them in a loop of its own in four interleaved
/// lanes, so that no addition waits for the one before it (one loop updating all five sums
/// compiled to half-scalar code: `fit_line` on 10 M points took 17.2 ms that way and 15.3 ms
/// this way on the project's 2-core machine, with the same sums bit for bit). Only Σu, Σv, Σu²,
/// Σue and Σe² are accumulated: Σuv = Σue + g·Σu², Σv² and Σe follow in the same way without
/// losing what matters (the residual sum of squares is taken from Σe² and Σue, which keep their
/// digits). The regressor starts from the single-precision 1/√(t − t0), several times cheaper than the double-precision square root and division,
/// and one step of the series y·(1 − ε)^-½ = y·(1 + ε/2 + 3ε²/8 + …), ε = 1 − (t − t0)·y²
/// (|ε| < 10⁻⁶), brings it to within a few units in the last place of the double; a block
/// with a t − t0 outside 10⁻³⁰…10³⁰ (beyond single precision, or not a valid time at all) is
/// computed in double precision throughout.
fn plain_moments(t: &[f64], y: &[f64], t0: f64, kx: f64, ky: f64, guess: f64) -> ([f64; 12], bool) {
    const BLOCK: usize = 512;
    const L: usize = 4;
    let mut x = [0.0; BLOCK];
    let (mut u, mut e) = ([0.0; BLOCK], [0.0; BLOCK]);
    let mut sums = [[0.0; L]; 5];
    let mut ok = true;
    for (tb, yb) in t.chunks(BLOCK).zip(y.chunks(BLOCK)) {
        let x = &mut x[..tb.len()];
        let mut in_range = true;
        for (x, &t) in x.iter_mut().zip(tb) {
            let d = t - t0;
            in_range &= (d > 1e-30) & (d < 1e30);
            #[allow(clippy::cast_possible_truncation)] // The seed only; refined below.
            let seed = f64::from(1.0f32 / (d as f32).sqrt());
            let eps = 1.0 - d * seed * seed;
            *x = seed + seed * eps * (0.5 + 0.375 * eps);
        }
        let y_finite = yb
            .iter()
            .fold(true, |acc, &y| acc & (y.abs() < f64::INFINITY));
        if in_range {
            ok &= y_finite;
        } else {
            for (x, &t) in x.iter_mut().zip(tb) {
                *x = 1.0 / (t - t0).sqrt();
            }
            // x lies in (0, ∞) exactly when t is finite and after t0 (t = ∞ gives 0, t ≤ t0
            // or NaN gives ∞, a negative or NaN).
            ok &= y_finite
                && x.iter()
                    .fold(true, |acc, &x| acc & (x > 0.0) & (x < f64::INFINITY));
        }
        // Lane l adds rows l, l + L, l + 2L… in order, as one loop over all five sums would.
        let (u, e) = (&mut u[..tb.len()], &mut e[..tb.len()]);
        for ((u, e), (&x, &y)) in u.iter_mut().zip(e.iter_mut()).zip(x.iter().zip(yb)) {
            *u = x - kx;
            *e = (y - ky) - guess * *u;
        }
        lane_sums(&mut sums[0], u, u, |u, _| u);
        lane_sums(&mut sums[1], yb, yb, |y, _| y - ky);
        lane_sums(&mut sums[2], u, u, |u, _| u * u);
        lane_sums(&mut sums[3], u, e, |u, e| u * e);
        lane_sums(&mut sums[4], e, e, |e, _| e * e);
    }
    let [su, sv, suu, sue, see] = sums.map(|lanes| (lanes[0] + lanes[1]) + (lanes[2] + lanes[3]));
    let suv = sue + guess * suu;
    let svv = see + 2.0 * guess * sue + guess * guess * suu;
    let se = sv - guess * su;
    let count = t.len() as f64;
    (
        [count, su, sv, suu, suv, svv, count, su, suu, se, sue, see],
        ok,
    )
}

#[derive(Debug, Default, Clone, Copy)]
struct ResidualSums {
    lags: [f64; LAGS],
    lag_rr: f64,
    rr: f64,
    wrr: f64,
    lag: f64,
    diff: f64,
    changes: u64,
    pos: u64,
    neg: u64,
}

impl ResidualSums {
    fn add(self, o: &ResidualSums) -> ResidualSums {
        let mut lags = self.lags;
        for (l, v) in lags.iter_mut().zip(&o.lags) {
            *l += v;
        }
        ResidualSums {
            lags,
            lag_rr: self.lag_rr + o.lag_rr,
            rr: self.rr + o.rr,
            wrr: self.wrr + o.wrr,
            lag: self.lag + o.lag,
            diff: self.diff + o.diff,
            changes: self.changes + o.changes,
            pos: self.pos + o.pos,
            neg: self.neg + o.neg,
        }
    }
}

fn sum_arrays<const K: usize>(parts: &[[f64; K]]) -> [f64; K] {
    let mut out = [0.0; K];
    for p in parts {
        for (o, v) in out.iter_mut().zip(p) {
            *o += v;
        }
    }
    out
}

/// z of the Wald–Wolfowitz runs test for `runs` runs of `pos` positive and `neg` negative signs.
fn runs_test_z(runs: u64, pos: u64, neg: u64) -> f64 {
    let (np, nn) = (pos as f64, neg as f64);
    let total = np + nn;
    if np < 1.0 || nn < 1.0 || total < 3.0 {
        return f64::NAN;
    }
    let mean = 2.0 * np * nn / total + 1.0;
    let var = 2.0 * np * nn * (2.0 * np * nn - total) / (total * total * (total - 1.0));
    if var <= 0.0 {
        return f64::NAN;
    }
    (runs as f64 - mean) / var.sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::linalg::lstsq;
    use nalgebra::{DMatrix, DVector};

    fn window<'a>(t: &'a [f64], i: &'a [f64]) -> Window<'a> {
        Window {
            time_s: t,
            current_a: i,
            t_after_s: None,
            t_before_s: None,
            t0_s: 0.0,
        }
    }

    #[test]
    fn matches_qr_on_cottrell_data() {
        let t: Vec<f64> = (1..=2000).map(|k| k as f64 * 1e-3).collect();
        let y: Vec<f64> = t
            .iter()
            .enumerate()
            .map(|(k, t)| 1e-5 / t.sqrt() + 2e-8 + 1e-8 * ((k * 7919 % 13) as f64 - 6.0))
            .collect();
        let fit = fit_line(
            &window(&t, &y),
            Regressor::InverseSqrt,
            Weighting::Ordinary,
            true,
        )
        .expect("fit");
        let design = DMatrix::from_fn(
            t.len(),
            2,
            |i, j| if j == 0 { 1.0 / t[i].sqrt() } else { 1.0 },
        );
        let qr = lstsq(&design, &DVector::from_vec(y.clone()), None).expect("qr");
        assert!((fit.slope - qr.coefficients[0]).abs() / qr.coefficients[0].abs() < 1e-12);
        assert!((fit.intercept.expect("b") - qr.coefficients[1]).abs() < 1e-18);
        let se = fit.covariance_uncorrected[0][0].sqrt();
        assert!((se - qr.standard_errors[0]).abs() / qr.standard_errors[0] < 1e-9);
        let se_b = fit.covariance_uncorrected[1][1].sqrt();
        assert!((se_b - qr.standard_errors[1]).abs() / qr.standard_errors[1] < 1e-9);
    }

    #[test]
    fn threads_give_the_same_answer_as_one() {
        // Long enough to split; compare with the AR(1) middle summed directly in one pass.
        let n = 450_001;
        let t: Vec<f64> = (1..=n).map(|k| k as f64 * 1e-5).collect();
        let mut state = 0.0f64;
        let y: Vec<f64> = t
            .iter()
            .enumerate()
            .map(|(k, t)| {
                state = 0.7 * state + 1e-9 * (((k * 2_654_435_761) % 1000) as f64 / 500.0 - 1.0);
                3e-6 / t.sqrt() + state
            })
            .collect();
        let fit = fit_line(
            &window(&t, &y),
            Regressor::InverseSqrt,
            Weighting::LogTime,
            true,
        )
        .expect("fit");
        // Direct O(n) evaluation of the middle matrix on one thread.
        let w = |i: usize| weight(Weighting::LogTime, &window(&t, &y), i);
        let x = |i: usize| 1.0 / t[i].sqrt();
        let sw: f64 = (0..n).map(w).sum();
        let xm = (0..n).map(|i| w(i) * x(i)).sum::<f64>() / sw;
        let phi = fit.noise.phi;
        let c = fit.noise.c;
        // The hashed innovations are themselves anticorrelated, so φ̂ is well below 0.7.
        assert!(phi > 0.2 && c > 0.0, "{phi} {c}");
        let (mut h, mut m2, mut prev) = (0.0, 0.0, 0.0);
        for i in 0..n {
            let z = w(i) * (x(i) - xm);
            if i > 0 {
                h = phi * (h + prev);
            }
            m2 += z * z + 2.0 * z * h;
            prev = z;
        }
        let sxx: f64 = (0..n).map(|i| w(i) * (x(i) - xm).powi(2)).sum();
        let m0: f64 = (0..n).map(|i| (w(i) * (x(i) - xm)).powi(2)).sum();
        let s2 = fit.residual_sd.powi(2);
        let v_b = s2 * ((1.0 - c) * m0 + c * m2) / (sxx * sxx);
        assert!(
            (fit.covariance[0][0] - v_b).abs() / v_b < 1e-8,
            "{} vs {v_b}",
            fit.covariance[0][0]
        );
    }

    #[test]
    fn packed_moments_match_row_by_row_sums() {
        // Times from 1e-35 s to 1e35 s: the ends lie beyond single precision and take the
        // double-precision path, the middle the single-precision seed; either way every sum
        // agrees with the plain row-by-row sum of the exact regressor (tolerance: rounding of
        // sums over 5000 rows, our own bound).
        let n = 5000;
        let t: Vec<f64> = (0..n)
            .map(|k| 10f64.powf(-35.0 + 70.0 * k as f64 / (n - 1) as f64))
            .collect();
        let y: Vec<f64> = t
            .iter()
            .enumerate()
            .map(|(k, t)| 1e-5 / t.sqrt() + 1e-9 * ((k * 7919 % 13) as f64 - 6.0))
            .collect();
        let (t0, kx, ky, guess) = (-1e-36, 0.3, 2e-6, 9e-6);
        let (sums, ok) = plain_moments(&t, &y, t0, kx, ky, guess);
        assert!(ok);
        let mut direct = [0.0; 12];
        for (&ti, &yi) in t.iter().zip(&y) {
            let u = 1.0 / (ti - t0).sqrt() - kx;
            let v = yi - ky;
            let e = v - guess * u;
            let row = [
                1.0,
                u,
                v,
                u * u,
                u * v,
                v * v,
                1.0,
                u,
                u * u,
                e,
                u * e,
                e * e,
            ];
            for (d, r) in direct.iter_mut().zip(row) {
                *d += r;
            }
        }
        for (k, (a, b)) in sums.iter().zip(&direct).enumerate() {
            assert!((a - b).abs() <= 1e-12 * b.abs(), "sum {k}: {a} vs {b}");
        }
        // A time at or before t0, or a current that is not finite, is caught.
        let mut bad = t.clone();
        bad[1234] = t0;
        assert!(!plain_moments(&bad, &y, t0, kx, ky, guess).1);
        let mut bad = y.clone();
        bad[4321] = f64::NAN;
        assert!(!plain_moments(&t, &bad, t0, kx, ky, guess).1);
    }

    #[test]
    fn interval_average_regressor_is_the_mean_current() {
        // The mean of t^-½ over (a, b) is 2(√b − √a)/(b − a).
        let t = [0.5, 1.0];
        let x = regressor(Regressor::IntervalAverage { t_before_s: 0.0 }, &t, 0.0, 1);
        assert!((x - 2.0 * (1.0f64.sqrt() - 0.5f64.sqrt()) / 0.5).abs() < 1e-15);
        let x0 = regressor(Regressor::IntervalAverage { t_before_s: 0.0 }, &t, 0.0, 0);
        assert!((x0 - 2.0 / 0.5f64.sqrt()).abs() < 1e-15);
    }

    #[test]
    fn noise_model_from_white_plus_ar1_autocorrelation() {
        // ρ(k) = 0.4·0.9^k exactly: the line through ln ρ recovers c and φ.
        let rho: Vec<f64> = (1..=10).map(|k| 0.4 * 0.9f64.powi(k)).collect();
        let m = NoiseModel::from_autocorrelation(&rho, 10_000);
        assert!(
            (m.phi - 0.9).abs() < 1e-12 && (m.c - 0.4).abs() < 1e-12,
            "{m:?}"
        );
        // The variance of a mean of k: for k = 2 it is 1 + ρ(1) by definition.
        assert!((m.mean_variance_factor(2) - (1.0 + 0.4 * 0.9)).abs() < 1e-12);
        assert_eq!(
            NoiseModel::from_autocorrelation(&[0.001; 10], 10_000),
            NoiseModel::WHITE
        );
    }

    #[test]
    fn runs_test_of_alternating_and_blocked_signs() {
        // 10 alternating signs: 10 runs against an expected 6, z > 0; two blocks: 2 runs, z < 0.
        assert!(runs_test_z(10, 5, 5) > 2.0);
        assert!(runs_test_z(2, 5, 5) < -2.5);
    }
}
