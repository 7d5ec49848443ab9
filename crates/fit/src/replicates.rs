//! Replicate statistics: what several runs measuring the same quantity say
//! together.
//!
//! Each run's own fit gives a value (usually the diffusion coefficient) and a
//! standard error. [`summarize`] reports two views of the same runs side by
//! side, because they answer different questions:
//!
//! - the plain view (mean, sample SD, RSD, standard error of the mean and a
//!   Student's t interval) uses only the scatter between runs;
//! - the weighted view (inverse-variance weighted mean, its internal standard
//!   error, χ², the Birge ratio and its p-value) asks whether that scatter is
//!   what the runs' own standard errors predict.
//!
//! When the runs scatter more than their fits claim, the fit uncertainty is
//! too optimistic and the external (Birge-scaled) standard error is the
//! honest one; [`FitVersusScatter`] keeps the two sources apart so that the
//! reader sees which dominates. Grubbs' test names a single suspect run.
//!
//! ```
//! use diffusor_fit::replicates::{summarize, GrubbsOutcome, RunEstimate};
//!
//! // Three runs, D in m²/s, each with the standard error its own fit gave.
//! let runs: Vec<RunEstimate> = [7.0e-10, 7.2e-10, 7.4e-10]
//!     .iter()
//!     .enumerate()
//!     .map(|(i, &d)| RunEstimate { label: format!("run {}", i + 1), value: d, std_error: 0.2e-10 })
//!     .collect();
//! let summary = summarize(&runs)?;
//! // By hand: mean 7.2e-10, SD √((0.2² + 0 + 0.2²)/2)·1e-10 = 0.2e-10.
//! assert!((summary.mean - 7.2e-10).abs() < 1e-22);
//! assert!((summary.sd - 0.2e-10).abs() < 1e-22);
//! // χ² = (1 + 0 + 1) on 2 degrees of freedom: Birge ratio exactly 1.
//! let weighted = summary.weighted.as_ref().expect("every run has a standard error");
//! assert!((weighted.birge_ratio - 1.0).abs() < 1e-12);
//! assert!(weighted.consistent);
//! assert!(matches!(summary.grubbs, GrubbsOutcome::Tested(ref g) if !g.outlier));
//! # Ok::<(), diffusor_fit::FitError>(())
//! ```

use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

use crate::error::FitError;

/// Confidence level of [`MeanInterval`].
pub const CONFIDENCE_LEVEL: f64 = 0.95;

/// Significance level below which the χ² p-value calls the runs
/// inconsistent with their own standard errors. 0.05 is common practice with
/// no single source; it is a convention, not a law.
pub const CONSISTENCY_ALPHA: f64 = 0.05;

/// Two-sided significance level of Grubbs' test, the level at which
/// Grubbs (1969) and ASTM E178 tabulate it.
pub const GRUBBS_ALPHA: f64 = 0.05;

/// One run's estimate of the quantity, as its own fit reported it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunEstimate {
    /// Name of the run as the user knows it (file name, segment number…).
    pub label: String,
    /// The run's estimate, in the unit of the quantity summarised (m²/s for
    /// a diffusion coefficient).
    pub value: f64,
    /// Standard error of `value` from the run's own fit, same unit as
    /// `value`. Zero, negative or non-finite means the run has none; such a
    /// run still counts in the plain statistics but switches the weighted
    /// ones off.
    pub std_error: f64,
}

/// What a set of replicate runs says together. All values are in the unit of
/// [`RunEstimate::value`] unless a field says otherwise.
#[derive(Debug, Clone, Serialize)]
pub struct ReplicateSummary {
    /// Number of runs (at least 2).
    pub n: usize,
    /// Arithmetic mean of the values.
    pub mean: f64,
    /// Sample standard deviation `s = √(Σ(xᵢ − x̄)²/(n − 1))`.
    pub sd: f64,
    /// Relative standard deviation `100·s/|x̄|` in percent; `None` when the
    /// mean is zero and the ratio has no meaning.
    pub rsd_percent: Option<f64>,
    /// Standard error of the mean `s/√n`.
    pub sem: f64,
    /// Student's t confidence interval of the mean at [`CONFIDENCE_LEVEL`].
    pub ci95: MeanInterval,
    /// Inverse-variance weighted statistics; `None` when some run has no
    /// usable standard error (see `weighted_omitted`).
    pub weighted: Option<WeightedMean>,
    /// The runs' own fit uncertainty beside their scatter; `None` for the
    /// same reason as `weighted`.
    pub fit_vs_scatter: Option<FitVersusScatter>,
    /// Why `weighted` and `fit_vs_scatter` are missing, when they are.
    pub weighted_omitted: Option<WeightsOmitted>,
    /// Grubbs' test for a single outlier.
    pub grubbs: GrubbsOutcome,
}

/// A two-sided confidence interval of the mean from Student's t
/// distribution (Student, Biometrika 6 (1908) 1): `x̄ ± t·s/√n` with `t` the
/// upper `(1 − level)/2` quantile on `n − 1` degrees of freedom.
#[derive(Debug, Clone, Serialize)]
pub struct MeanInterval {
    /// Confidence level (dimensionless, 0.95).
    pub level: f64,
    /// Degrees of freedom `n − 1`.
    pub dof: usize,
    /// The t quantile used (dimensionless).
    pub t_critical: f64,
    /// `t·s/√n`.
    pub half_width: f64,
    /// `x̄ − half_width`.
    pub lower: f64,
    /// `x̄ + half_width`.
    pub upper: f64,
}

/// The inverse-variance weighted mean and the test of whether the runs agree
/// within their own standard errors.
///
/// With weights `wᵢ = 1/σᵢ²`: `x̄_w = Σwᵢxᵢ/Σwᵢ`, internal standard error
/// `1/√Σwᵢ`, `χ² = Σwᵢ(xᵢ − x̄_w)²` on `n − 1` degrees of freedom and the
/// Birge ratio `R_B = √(χ²/(n − 1))` (R. T. Birge, Phys. Rev. 40 (1932) 207).
/// When `R_B > 1` the external standard error `R_B/√Σwᵢ` (Birge's error
/// "from external consistency") is also given.
#[derive(Debug, Clone, Serialize)]
pub struct WeightedMean {
    /// `x̄_w`.
    pub mean: f64,
    /// Internal standard error `1/√Σwᵢ`: what the runs' own fits promise.
    pub internal_std_error: f64,
    /// `χ² = Σwᵢ(xᵢ − x̄_w)²` (dimensionless).
    pub chi_squared: f64,
    /// Degrees of freedom of `chi_squared`, `n − 1`.
    pub dof: usize,
    /// `R_B = √(χ²/(n − 1))` (dimensionless); near 1 when the scatter is what
    /// the standard errors predict.
    pub birge_ratio: f64,
    /// Probability of a χ² at least this large if the standard errors were
    /// right (upper tail of the χ² distribution, dimensionless).
    pub p_value: f64,
    /// External standard error `R_B/√Σwᵢ`, given only when `R_B > 1`.
    pub external_std_error: Option<f64>,
    /// `p_value ≥` [`CONSISTENCY_ALPHA`]: the runs agree within their own
    /// uncertainties.
    pub consistent: bool,
    /// The verdict in one sentence, for a report.
    pub statement: String,
}

/// The runs' own fit uncertainty kept apart from their run-to-run scatter.
#[derive(Debug, Clone, Serialize)]
pub struct FitVersusScatter {
    /// Root mean square of the per-run standard errors `√(Σσᵢ²/n)`: the
    /// typical uncertainty one fit claims.
    pub rms_std_error: f64,
    /// Sample standard deviation of the values (the same as
    /// [`ReplicateSummary::sd`]): the uncertainty one run actually shows.
    pub sd: f64,
    /// `sd / rms_std_error` (dimensionless). Near 1 the fits account for the
    /// scatter; well above 1 something outside the fit (electrode
    /// preparation, area, concentration, convection) varies between runs.
    pub scatter_to_fit_ratio: f64,
}

/// Why the weighted statistics were left out.
#[derive(Debug, Clone, Serialize)]
pub struct WeightsOmitted {
    /// Labels of the runs without a usable standard error.
    pub runs: Vec<String>,
    /// The reason in one sentence, for a report.
    pub reason: String,
}

/// Grubbs' test for one outlier, or why it was not run.
#[derive(Debug, Clone, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum GrubbsOutcome {
    /// The test cannot be applied to these runs.
    NotApplicable {
        /// Why, in one sentence.
        reason: String,
    },
    /// The test was run.
    Tested(GrubbsTest),
}

/// Grubbs' two-sided test for a single outlier (F. E. Grubbs, Technometrics
/// 11 (1969) 1): `G = max|xᵢ − x̄|/s` against the critical value of
/// [`grubbs_critical_value`].
#[derive(Debug, Clone, Serialize)]
pub struct GrubbsTest {
    /// `G` (dimensionless).
    pub statistic: f64,
    /// `G_crit` at `alpha` for this `n` (dimensionless).
    pub critical_value: f64,
    /// Two-sided significance level (dimensionless).
    pub alpha: f64,
    /// Zero-based index of the run farthest from the mean (the first such
    /// run when two are equally far).
    pub suspect_index: usize,
    /// Label of that run.
    pub suspect_label: String,
    /// Its value.
    pub suspect_value: f64,
    /// `G > G_crit`: the suspect is an outlier at `alpha`.
    pub outlier: bool,
    /// The verdict in one sentence, for a report.
    pub statement: String,
}

/// Summarises replicate runs of the same quantity.
///
/// # Errors
///
/// [`FitError::TooFewRuns`] for fewer than 2 runs,
/// [`FitError::NonFiniteRunValue`] when a value is NaN or infinite, and
/// [`FitError::NonFiniteStatistic`] when finite inputs still overflow double
/// precision. A missing standard error is not an error: it switches the
/// weighted statistics off and says so in [`ReplicateSummary::weighted_omitted`].
pub fn summarize(runs: &[RunEstimate]) -> Result<ReplicateSummary, FitError> {
    let n = runs.len();
    if n < 2 {
        return Err(FitError::TooFewRuns { runs: n, needed: 2 });
    }
    if let Some((index, run)) = runs.iter().enumerate().find(|(_, r)| !r.value.is_finite()) {
        return Err(FitError::NonFiniteRunValue {
            index,
            label: run.label.clone(),
            value: run.value,
        });
    }

    let values: Vec<f64> = runs.iter().map(|r| r.value).collect();
    let (mean, sd) = mean_and_sd(&values)?;
    let nf = n as f64;
    let sem = sd / nf.sqrt();
    let rsd_percent = (mean != 0.0).then(|| 100.0 * sd / mean.abs());
    let ci95 = mean_interval(mean, sem, n - 1)?;

    let missing: Vec<String> = runs
        .iter()
        .filter(|r| !has_std_error(r))
        .map(|r| r.label.clone())
        .collect();
    let (weighted, fit_vs_scatter, weighted_omitted) = if missing.is_empty() {
        let std_errors: Vec<f64> = runs.iter().map(|r| r.std_error).collect();
        (
            Some(weighted_mean(&values, &std_errors)?),
            Some(fit_versus_scatter(&std_errors, sd)?),
            None,
        )
    } else {
        let reason = format!(
            "weighted statistics left out: {} of {n} runs have no usable standard error ({})",
            missing.len(),
            missing.join(", ")
        );
        (
            None,
            None,
            Some(WeightsOmitted {
                runs: missing,
                reason,
            }),
        )
    };

    let grubbs = grubbs_test(runs, mean, sd)?;

    Ok(ReplicateSummary {
        n,
        mean,
        sd,
        rsd_percent,
        sem,
        ci95,
        weighted,
        fit_vs_scatter,
        weighted_omitted,
        grubbs,
    })
}

/// Two-sided critical value of Grubbs' statistic for `n` values at
/// significance level `alpha`:
/// `G_crit = ((n − 1)/√n)·√(t²/(n − 2 + t²))`, with `t` the upper
/// `alpha/(2n)` quantile of Student's t on `n − 2` degrees of freedom.
///
/// The test is F. E. Grubbs, Technometrics 11 (1969) 1; this expression for
/// its critical value is the one the NIST/SEMATECH e-Handbook of Statistical
/// Methods gives under Grubbs' test. It adds up the chance of each of the `n`
/// runs being that far out, so it is an upper bound on the tail that is
/// exact for `n = 3` and reproduces the published tables to about one unit in
/// their third decimal (see the tests).
///
/// # Errors
///
/// [`FitError::TooFewRuns`] for `n < 3` (with two values `G` is always
/// `1/√2` and says nothing), [`FitError::InvalidSignificance`] unless
/// `0 < alpha < 1`.
pub fn grubbs_critical_value(n: usize, alpha: f64) -> Result<f64, FitError> {
    if n < 3 {
        return Err(FitError::TooFewRuns { runs: n, needed: 3 });
    }
    if !(alpha > 0.0 && alpha < 1.0) {
        return Err(FitError::InvalidSignificance { alpha });
    }
    let nf = n as f64;
    // The lower-tail quantile, negated, keeps full precision for the small
    // tail areas used here instead of rounding through 1 − α/(2n).
    let t = -students_t_quantile(alpha / (2.0 * nf), nf - 2.0)?;
    let t2 = t * t;
    Ok((nf - 1.0) / nf.sqrt() * (t2 / (nf - 2.0 + t2)).sqrt())
}

/// A standard error is usable as a weight when it is a positive finite
/// number.
fn has_std_error(run: &RunEstimate) -> bool {
    run.std_error.is_finite() && run.std_error > 0.0
}

/// Mean and sample SD by two passes: subtracting the mean before squaring
/// avoids the cancellation of `Σx² − n·x̄²` when the runs agree to many
/// digits, which good replicates do.
fn mean_and_sd(values: &[f64]) -> Result<(f64, f64), FitError> {
    let nf = values.len() as f64;
    // Dividing before summing keeps values near f64::MAX from overflowing.
    let mean: f64 = values.iter().map(|x| x / nf).sum();
    if !mean.is_finite() {
        return Err(FitError::NonFiniteStatistic { what: "mean" });
    }
    let ss: f64 = values.iter().map(|x| (x - mean) * (x - mean)).sum();
    let sd = (ss / (nf - 1.0)).sqrt();
    if !sd.is_finite() {
        return Err(FitError::NonFiniteStatistic {
            what: "standard deviation",
        });
    }
    Ok((mean, sd))
}

/// Student's t quantile `t_p` with `dof` degrees of freedom, through
/// [`crate::special::students_t_quantile`].
fn students_t_quantile(p: f64, dof: f64) -> Result<f64, FitError> {
    crate::special::students_t_quantile(p, dof).ok_or_else(|| FitError::Distribution {
        message: format!("no Student's t quantile at p = {p} with {dof} degrees of freedom"),
    })
}

/// Student's t interval of the mean (Student, Biometrika 6 (1908) 1).
fn mean_interval(mean: f64, sem: f64, dof: usize) -> Result<MeanInterval, FitError> {
    let tail = (1.0 - CONFIDENCE_LEVEL) / 2.0;
    let t_critical = -students_t_quantile(tail, dof as f64)?;
    let half_width = t_critical * sem;
    Ok(MeanInterval {
        level: CONFIDENCE_LEVEL,
        dof,
        t_critical,
        half_width,
        lower: mean - half_width,
        upper: mean + half_width,
    })
}

/// Inverse-variance weighted mean, χ² and Birge ratio (R. T. Birge, Phys.
/// Rev. 40 (1932) 207).
fn weighted_mean(values: &[f64], std_errors: &[f64]) -> Result<WeightedMean, FitError> {
    let n = values.len();
    let dof = n - 1;
    // Weights relative to the smallest standard error, (σ_min/σᵢ)² ≤ 1, give
    // the same mean as 1/σᵢ² but cannot overflow when σ is tiny in SI units
    // (a D of 1e-9 m²/s with a standard error of 1e-12 has 1/σ² = 1e24, and
    // smaller ones are not far off).
    let se_min = std_errors.iter().copied().fold(f64::INFINITY, f64::min);
    let rel_weights: Vec<f64> = std_errors.iter().map(|s| (se_min / s).powi(2)).collect();
    let rel_sum: f64 = rel_weights.iter().sum();
    let mean = values
        .iter()
        .zip(&rel_weights)
        .map(|(x, w)| x * (w / rel_sum))
        .sum::<f64>();
    let internal_std_error = se_min / rel_sum.sqrt();
    let chi_squared: f64 = values
        .iter()
        .zip(std_errors)
        .map(|(x, s)| ((x - mean) / s).powi(2))
        .sum();
    if !mean.is_finite() {
        return Err(FitError::NonFiniteStatistic {
            what: "weighted mean",
        });
    }
    if !chi_squared.is_finite() {
        return Err(FitError::NonFiniteStatistic {
            what: "chi-squared",
        });
    }
    let birge_ratio = (chi_squared / dof as f64).sqrt();
    let p_value = ChiSquared::new(dof as f64)
        .map_err(|e| FitError::Distribution {
            message: e.to_string(),
        })?
        .sf(chi_squared);
    let external_std_error = (birge_ratio > 1.0).then_some(internal_std_error * birge_ratio);
    let consistent = p_value >= CONSISTENCY_ALPHA;
    let figures = format!(
        "Birge ratio {}, χ² = {} on {dof} degrees of freedom, {}",
        prose_number(birge_ratio, 4),
        prose_number(chi_squared, 4),
        format_p(p_value)
    );
    let statement = match external_std_error {
        _ if consistent => format!(
            "the {n} runs agree within their own standard errors ({figures} ≥ {CONSISTENCY_ALPHA})"
        ),
        Some(external) => format!(
            "the {n} runs scatter more than their own standard errors allow ({figures} < \
             {CONSISTENCY_ALPHA}); the external standard error {} (internal × Birge \
             ratio) is the honest uncertainty of the weighted mean",
            prose_number(external, 3)
        ),
        // χ²'s upper 5 % point exceeds its degrees of freedom for every dof,
        // so p < 0.05 implies R_B > 1; this arm is kept only so that the
        // statement never lies if the threshold is changed.
        None => format!(
            "the {n} runs scatter more than their own standard errors allow ({figures} < \
             {CONSISTENCY_ALPHA})"
        ),
    };
    Ok(WeightedMean {
        mean,
        internal_std_error,
        chi_squared,
        dof,
        birge_ratio,
        p_value,
        external_std_error,
        consistent,
        statement,
    })
}

fn fit_versus_scatter(std_errors: &[f64], sd: f64) -> Result<FitVersusScatter, FitError> {
    let nf = std_errors.len() as f64;
    // Scaling by the largest standard error before squaring keeps the mean
    // square inside f64 for any finite standard errors.
    let se_max = std_errors.iter().copied().fold(0.0, f64::max);
    let rms_std_error =
        se_max * (std_errors.iter().map(|s| (s / se_max).powi(2)).sum::<f64>() / nf).sqrt();
    let scatter_to_fit_ratio = sd / rms_std_error;
    if !scatter_to_fit_ratio.is_finite() {
        return Err(FitError::NonFiniteStatistic {
            what: "scatter-to-fit ratio",
        });
    }
    Ok(FitVersusScatter {
        rms_std_error,
        sd,
        scatter_to_fit_ratio,
    })
}

fn grubbs_test(runs: &[RunEstimate], mean: f64, sd: f64) -> Result<GrubbsOutcome, FitError> {
    let n = runs.len();
    if n < 3 {
        return Ok(GrubbsOutcome::NotApplicable {
            reason: format!("Grubbs' test needs at least 3 runs; {n} given"),
        });
    }
    if sd == 0.0 {
        return Ok(GrubbsOutcome::NotApplicable {
            reason: format!("all {n} runs have the same value, so no run stands out"),
        });
    }
    let mut suspect_index = 0;
    let mut largest = 0.0;
    for (i, run) in runs.iter().enumerate() {
        let deviation = (run.value - mean).abs();
        if deviation > largest {
            largest = deviation;
            suspect_index = i;
        }
    }
    let statistic = largest / sd;
    let critical_value = grubbs_critical_value(n, GRUBBS_ALPHA)?;
    let outlier = statistic > critical_value;
    let suspect = &runs[suspect_index];
    let statement = if outlier {
        format!(
            "run “{}” ({}) is an outlier by Grubbs' test: G = {statistic:.3} > G_crit = \
             {critical_value:.3} (n = {n}, α = {GRUBBS_ALPHA} two-sided)",
            suspect.label,
            prose_number(suspect.value, 5)
        )
    } else {
        format!(
            "no outlier by Grubbs' test: the run farthest from the mean, “{}” ({}), has G = \
             {statistic:.3} ≤ G_crit = {critical_value:.3} (n = {n}, α = {GRUBBS_ALPHA} two-sided)",
            suspect.label,
            prose_number(suspect.value, 5)
        )
    };
    Ok(GrubbsOutcome::Tested(GrubbsTest {
        statistic,
        critical_value,
        alpha: GRUBBS_ALPHA,
        suspect_index,
        suspect_label: suspect.label.clone(),
        suspect_value: suspect.value,
        outlier,
        statement,
    }))
}

/// `x` to `digits` significant figures for a sentence: plain between 0.01 and 10⁴, else as
/// `7.65 × 10⁻⁸`.
fn prose_number(x: f64, digits: usize) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    if x == 0.0 {
        return "0".to_owned();
    }
    let exponent = x.abs().log10().floor() as i32;
    if (-2..4).contains(&exponent) {
        let decimals = (digits as i32 - 1 - exponent).max(0) as usize;
        return format!("{x:.decimals$}");
    }
    let mantissa = x / 10f64.powi(exponent);
    // Rounding can carry the mantissa to 10.
    let (mantissa, exponent) =
        if (mantissa.abs() * 10f64.powi(digits as i32 - 1)).round() >= 10f64.powi(digits as i32) {
            (mantissa / 10.0, exponent + 1)
        } else {
            (mantissa, exponent)
        };
    const SUPERSCRIPTS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut power: String = exponent
        .unsigned_abs()
        .to_string()
        .chars()
        .map(|c| SUPERSCRIPTS[c.to_digit(10).map_or(0, |d| d as usize)])
        .collect();
    if exponent < 0 {
        power.insert(0, '⁻');
    }
    format!(
        "{mantissa:.prec$} × 10{power}",
        prec = digits.saturating_sub(1)
    )
}

/// A p-value as a statement reads it: `p = 0.023` to three decimals, and
/// `p < 0.001` below that, where more digits say nothing a reader can use
/// (and a p-value that underflows would otherwise print as `0.00e0`).
pub fn format_p(p: f64) -> String {
    if p < 1e-3 {
        "p < 0.001".to_owned()
    } else {
        format!("p = {p:.3}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Relative agreement to `rel`.
    fn close(actual: f64, expected: f64, rel: f64) -> bool {
        (actual - expected).abs() <= rel * expected.abs()
    }

    fn assert_close(actual: f64, expected: f64, rel: f64, what: &str) {
        assert!(
            close(actual, expected, rel),
            "{what}: got {actual:e}, expected {expected:e} (rel. tolerance {rel:e})"
        );
    }

    fn runs(values: &[f64], std_errors: &[f64]) -> Vec<RunEstimate> {
        values
            .iter()
            .zip(std_errors)
            .enumerate()
            .map(|(i, (&value, &std_error))| RunEstimate {
                label: format!("r{}", i + 1),
                value,
                std_error,
            })
            .collect()
    }

    fn tested(outcome: &GrubbsOutcome) -> &GrubbsTest {
        match outcome {
            GrubbsOutcome::Tested(g) => g,
            GrubbsOutcome::NotApplicable { reason } => panic!("Grubbs not run: {reason}"),
        }
    }

    #[test]
    fn students_t_quantiles_match_closed_forms_and_the_printed_table() {
        // Closed forms of the t quantile (any statistics text): for 1 dof the
        // t distribution is Cauchy, t_p = tan(π(p − ½)); for 2 dof
        // t_p = (2p − 1)/√(2p(1 − p)).
        let p: f64 = 0.975;
        let t1 = -students_t_quantile(1.0 - p, 1.0).unwrap();
        assert_close(
            t1,
            (std::f64::consts::PI * (p - 0.5)).tan(),
            1e-9,
            "t(0.975, 1)",
        );
        let t2 = -students_t_quantile(1.0 - p, 2.0).unwrap();
        assert_close(
            t2,
            (2.0 * p - 1.0) / (2.0 * p * (1.0 - p)).sqrt(),
            1e-9,
            "t(0.975, 2)",
        );
        // Two-sided 95 % points as printed in standard t tables (values as
        // remembered from them, to the 3 decimals they print).
        for (dof, printed) in [(1, 12.706), (2, 4.303), (4, 2.776), (9, 2.262), (29, 2.045)] {
            let interval = mean_interval(0.0, 1.0, dof).unwrap();
            assert!(
                (interval.t_critical - printed).abs() < 5e-4,
                "t(0.975, {dof}) = {} but the table prints {printed}",
                interval.t_critical
            );
        }
    }

    /// Critical values of Grubbs' statistic as printed in F. E. Grubbs,
    /// Technometrics 11 (1969) 1, Table 1 and in ASTM E178 (two-sided α is
    /// twice the one-sided level of those tables). The values are as
    /// remembered from those tables and agree with the reprint in D. Harvey,
    /// *Analytical Chemistry 2.1*, Appendix 7 (LibreTexts), except that the
    /// reprint's n = 7 entry at α = 0.05 reads 2.202, a transposition of 2.020
    /// (critical values grow with n and its n = 8 entry is 2.126).
    const GRUBBS_TABLE_05: [(usize, f64); 13] = [
        (3, 1.155),
        (4, 1.481),
        (5, 1.715),
        (6, 1.887),
        (7, 2.020),
        (8, 2.126),
        (9, 2.215),
        (10, 2.290),
        (11, 2.355),
        (12, 2.412),
        (13, 2.462),
        (14, 2.507),
        (15, 2.549),
    ];

    /// The α = 0.01 column of the same tables, same provenance.
    const GRUBBS_TABLE_01: [(usize, f64); 12] = [
        (3, 1.155),
        (4, 1.496),
        (5, 1.764),
        (6, 1.973),
        (7, 2.139),
        (8, 2.274),
        (9, 2.387),
        (10, 2.482),
        (11, 2.564),
        (12, 2.636),
        (13, 2.699),
        (14, 2.755),
    ];

    #[test]
    fn grubbs_critical_values_reproduce_the_published_table_at_1_percent() {
        // Every entry is the formula rounded to the 3 decimals printed.
        for (n, printed) in GRUBBS_TABLE_01 {
            let g = grubbs_critical_value(n, 0.01).unwrap();
            assert!(
                (g - printed).abs() <= 5e-4,
                "n = {n}: formula gives {g:.5}, table prints {printed}"
            );
        }
    }

    #[test]
    fn grubbs_critical_values_match_the_published_table_at_5_percent() {
        // Ten of the thirteen entries are the formula rounded to 3 decimals.
        // Three are one unit off in the last decimal: n = 3 (formula 1.15430,
        // printed 1.155), n = 8 (2.12665, printed 2.126) and n = 15 (2.54831,
        // printed 2.549). For n = 3 the formula is exact (see the next test),
        // so the printed 1.155 is the table's rounding, not a fault of the
        // formula; the table is therefore checked to one unit of its last
        // decimal, and the ten exact agreements are counted so that a drift
        // of the formula cannot hide inside that tolerance.
        let mut rounded_equal = 0;
        for (n, printed) in GRUBBS_TABLE_05 {
            let g = grubbs_critical_value(n, 0.05).unwrap();
            assert!(
                (g - printed).abs() <= 1e-3,
                "n = {n}: formula gives {g:.5}, table prints {printed}"
            );
            if (g - printed).abs() <= 5e-4 {
                rounded_equal += 1;
            }
        }
        assert_eq!(rounded_equal, 10);
    }

    #[test]
    fn grubbs_critical_value_for_three_is_just_below_the_largest_possible_g() {
        // For n = 3 the t quantile is on 1 dof and huge, so G_crit sits just
        // under the bound (n − 1)/√n = 2/√3 that no sample can exceed
        // (Samuelson's inequality: P. A. Samuelson, J. Am. Stat. Assoc. 63
        // (1968) 1522, as remembered; it follows from Σdᵢ = 0 and
        // Cauchy–Schwarz on the other n − 1 deviations). With the Cauchy
        // quantile t = cot(π·α/(2n)) the formula is G_crit =
        // (2/√3)·√(t²/(1 + t²)) = (2/√3)·cos(π·α/6). For n = 3 this is the
        // exact critical value, not only a bound: Σdᵢ² = 2s², so two runs
        // cannot both lie more than g·s from the mean once g > 1, the events
        // the formula adds up are disjoint, and their sum is the exact tail.
        let g = grubbs_critical_value(3, 0.05).unwrap();
        let exact = 2.0 / 3f64.sqrt() * (std::f64::consts::PI * 0.05 / 6.0).cos();
        assert_close(g, exact, 1e-9, "G_crit(3)");
        assert!(g < 2.0 / 3f64.sqrt());
    }

    #[test]
    fn grubbs_critical_value_refuses_bad_arguments() {
        assert_eq!(
            grubbs_critical_value(2, 0.05).unwrap_err().to_string(),
            "too few runs: 2 given, at least 3 needed"
        );
        assert_eq!(
            grubbs_critical_value(5, 1.0).unwrap_err().to_string(),
            "significance level 1 must lie strictly between 0 and 1"
        );
        assert!(matches!(
            grubbs_critical_value(5, f64::NAN),
            Err(FitError::InvalidSignificance { .. })
        ));
    }

    #[test]
    fn consistent_runs_have_birge_ratio_one() {
        // D = 7.0, 7.2, 7.4 × 1e-10 m²/s, each ± 0.2e-10. By hand: mean 7.2e-10;
        // SD √((0.2² + 0 + 0.2²)/2)e-10 = 0.2e-10; SEM 0.2e-10/√3 =
        // 1.154 700 5e-11; RSD 100·0.2/7.2 = 2.777 78 %. Equal weights, so
        // x̄_w = 7.2e-10 and the internal SE is also 0.2e-10/√3; χ² = 1 + 0 + 1
        // = 2 on 2 dof, R_B = 1, and for 2 dof the χ² upper tail is
        // exp(−χ²/2) = e⁻¹ = 0.367 879.
        let s = summarize(&runs(&[7.0e-10, 7.2e-10, 7.4e-10], &[0.2e-10; 3])).unwrap();
        assert_eq!(s.n, 3);
        assert_close(s.mean, 7.2e-10, 1e-14, "mean");
        assert_close(s.sd, 0.2e-10, 1e-12, "sd");
        assert_close(s.sem, 0.2e-10 / 3f64.sqrt(), 1e-12, "sem");
        assert_close(s.rsd_percent.unwrap(), 100.0 * 0.2 / 7.2, 1e-12, "rsd");
        // t(0.975, 2) = 4.302 65 from the 2-dof closed form above.
        let t2 = 0.95 / (2.0f64 * 0.975 * 0.025).sqrt();
        assert_close(
            s.ci95.half_width,
            t2 * 0.2e-10 / 3f64.sqrt(),
            1e-9,
            "ci half width",
        );
        assert_close(s.ci95.lower, 7.2e-10 - s.ci95.half_width, 1e-14, "ci lower");
        assert_eq!(s.ci95.dof, 2);

        let w = s.weighted.as_ref().unwrap();
        assert_close(w.mean, 7.2e-10, 1e-14, "weighted mean");
        assert_close(
            w.internal_std_error,
            0.2e-10 / 3f64.sqrt(),
            1e-12,
            "internal se",
        );
        assert_close(w.chi_squared, 2.0, 1e-10, "chi2");
        assert_close(w.birge_ratio, 1.0, 1e-10, "birge");
        assert_close(w.p_value, (-1.0f64).exp(), 1e-9, "p");
        assert!(w.consistent);
        // R_B is 1 up to rounding, so an external SE may or may not appear;
        // if it does it must equal the internal one.
        if let Some(ext) = w.external_std_error {
            assert_close(ext, w.internal_std_error, 1e-9, "external se");
        }
        assert!(
            w.statement
                .starts_with("the 3 runs agree within their own standard errors")
        );

        let f = s.fit_vs_scatter.as_ref().unwrap();
        assert_close(f.rms_std_error, 0.2e-10, 1e-12, "rms se");
        assert_close(f.scatter_to_fit_ratio, 1.0, 1e-10, "scatter/fit");
        assert!(s.weighted_omitted.is_none());
    }

    #[test]
    fn inconsistent_runs_have_large_birge_ratio_and_external_error() {
        // The same values with ten times smaller standard errors (0.02e-10):
        // χ² = (0.2/0.02)² + 0 + (0.2/0.02)² = 200 on 2 dof, R_B = √100 = 10,
        // p = exp(−100) = 3.720 076e-44; external SE = 10 × 0.02e-10/√3.
        let s = summarize(&runs(&[7.0e-10, 7.2e-10, 7.4e-10], &[0.02e-10; 3])).unwrap();
        let w = s.weighted.as_ref().unwrap();
        assert_close(w.chi_squared, 200.0, 1e-10, "chi2");
        assert_close(w.birge_ratio, 10.0, 1e-10, "birge");
        assert_close(w.p_value, (-100.0f64).exp(), 1e-6, "p");
        assert!(!w.consistent);
        assert_close(
            w.external_std_error.unwrap(),
            10.0 * 0.02e-10 / 3f64.sqrt(),
            1e-10,
            "ext",
        );
        // p = 3.7e-44 reads as a bound, not as digits (or as 0.00e0 once it underflows).
        assert!(
            w.statement.contains(", p < 0.001 < 0.05)"),
            "{}",
            w.statement
        );
        assert_eq!(format_p(0.0), "p < 0.001");
        assert_eq!(format_p(0.0234), "p = 0.023");
        assert!(
            w.statement
                .starts_with("the 3 runs scatter more than their own standard errors allow"),
            "{}",
            w.statement
        );
        assert_close(
            s.fit_vs_scatter.unwrap().scatter_to_fit_ratio,
            10.0,
            1e-10,
            "ratio",
        );
    }

    #[test]
    fn unequal_weights_by_hand() {
        // x = 1, 2 with σ = 1, 2: w = 1, 1/4; x̄_w = (1 + 0.5)/1.25 = 1.2;
        // internal SE = 1/√1.25 = 0.894 427; χ² = 1·0.2² + 0.25·0.8² = 0.2 on
        // 1 dof, R_B = √0.2; the 1-dof χ² upper tail is erfc(√(χ²/2)) (χ²₁ is
        // the square of a standard normal). RMS of σ = √((1 + 4)/2) = √2.5; SD
        // of (1, 2) = 1/√2.
        let s = summarize(&runs(&[1.0, 2.0], &[1.0, 2.0])).unwrap();
        let w = s.weighted.as_ref().unwrap();
        assert_close(w.mean, 1.2, 1e-14, "weighted mean");
        assert_close(
            w.internal_std_error,
            1.0 / 1.25f64.sqrt(),
            1e-14,
            "internal se",
        );
        assert_close(w.chi_squared, 0.2, 1e-12, "chi2");
        assert_close(w.birge_ratio, 0.2f64.sqrt(), 1e-12, "birge");
        let p = statrs::function::erf::erfc(0.1f64.sqrt());
        assert_close(w.p_value, p, 1e-9, "p");
        assert!(
            w.external_std_error.is_none(),
            "R_B < 1 gives no external SE"
        );
        let f = s.fit_vs_scatter.as_ref().unwrap();
        assert_close(f.rms_std_error, 2.5f64.sqrt(), 1e-14, "rms se");
        assert_close(
            f.scatter_to_fit_ratio,
            (0.5f64).sqrt() / 2.5f64.sqrt(),
            1e-14,
            "ratio",
        );
        // t(0.975, 1) = tan(0.475π) = 12.706 2; SEM = (1/√2)/√2 = 0.5.
        let t1 = (0.475 * std::f64::consts::PI).tan();
        assert_close(s.ci95.half_width, t1 * 0.5, 1e-9, "ci half width");
        match &s.grubbs {
            GrubbsOutcome::NotApplicable { reason } => {
                assert_eq!(reason, "Grubbs' test needs at least 3 runs; 2 given");
            }
            GrubbsOutcome::Tested(_) => panic!("Grubbs must not run on 2 values"),
        }
    }

    #[test]
    fn obvious_outlier_is_flagged_by_label() {
        // x = 7.1, 7.2, 7.3, 7.2, 9.0 (×1e-10 m²/s). By hand: mean 37.8/5 =
        // 7.56; deviations −0.46, −0.36, −0.26, −0.36, 1.44; Σd² = 2.612;
        // s = √(2.612/4) = 0.808 084; G = 1.44/0.808 084 = 1.781 999 >
        // G_crit(5) = 1.715 (Grubbs 1969 table).
        let mut r = runs(
            &[7.1e-10, 7.2e-10, 7.3e-10, 7.2e-10, 9.0e-10],
            &[0.05e-10; 5],
        );
        r[4].label = "electrode B, run 2".to_owned();
        let s = summarize(&r).unwrap();
        let g = tested(&s.grubbs);
        assert_close(g.statistic, 1.44 / (2.612f64 / 4.0).sqrt(), 1e-9, "G");
        assert!(g.outlier);
        assert_eq!(g.suspect_index, 4);
        assert_eq!(g.suspect_label, "electrode B, run 2");
        assert!(
            g.statement.starts_with(
                "run “electrode B, run 2” (9.0000 × 10⁻¹⁰) is an outlier by Grubbs' test"
            ),
            "{}",
            g.statement
        );
        // The same outlier makes the runs inconsistent with their 0.05e-10
        // standard errors.
        assert!(!s.weighted.unwrap().consistent);
    }

    #[test]
    fn moderate_spread_has_no_outlier() {
        // x = 1, 2, 3, 4, 6. By hand: mean 3.2; Σd² = 4.84 + 1.44 + 0.04 +
        // 0.64 + 7.84 = 14.8; s = √3.7 = 1.923 538; G = 2.8/s = 1.455 650 <
        // 1.715; the farthest run is the fifth.
        let s = summarize(&runs(&[1.0, 2.0, 3.0, 4.0, 6.0], &[1.0; 5])).unwrap();
        let g = tested(&s.grubbs);
        assert_close(g.statistic, 2.8 / 3.7f64.sqrt(), 1e-12, "G");
        assert!(!g.outlier);
        assert_eq!(g.suspect_label, "r5");
        assert!(g.statement.starts_with("no outlier by Grubbs' test"));
    }

    #[test]
    fn numbers_in_sentences_read_as_prose() {
        assert_eq!(prose_number(7.649_04e-8, 3), "7.65 × 10⁻⁸");
        assert_eq!(prose_number(6.862_855e-6, 5), "6.8629 × 10⁻⁶");
        assert_eq!(prose_number(142_080.123_6, 4), "1.421 × 10⁵");
        assert_eq!(prose_number(266.533, 4), "266.5");
        assert_eq!(prose_number(1.0442, 4), "1.044");
        assert_eq!(prose_number(9.9996e-9, 3), "1.00 × 10⁻⁸");
    }

    #[test]
    fn one_run_far_from_identical_others_reaches_the_upper_bound_of_g() {
        // Five equal values and one different: G equals the largest value any
        // sample of 6 can reach, (n − 1)/√n = 5/√6 = 2.041 241 (Samuelson's
        // inequality, see above), which exceeds G_crit(6) = 1.887 (Grubbs
        // 1969 table).
        let s = summarize(&runs(&[7.2, 7.2, 7.2, 7.2, 7.2, 7.5], &[0.1; 6])).unwrap();
        let g = tested(&s.grubbs);
        assert_close(g.statistic, 5.0 / 6f64.sqrt(), 1e-9, "G");
        assert!(g.outlier);
        assert_eq!(g.suspect_label, "r6");
    }

    #[test]
    fn identical_values_give_zero_spread_and_no_grubbs() {
        let s = summarize(&runs(&[3.0, 3.0, 3.0], &[0.1; 3])).unwrap();
        assert_eq!(s.sd, 0.0);
        assert_eq!(s.ci95.half_width, 0.0);
        assert_eq!(s.rsd_percent, Some(0.0));
        let w = s.weighted.unwrap();
        assert_eq!(w.chi_squared, 0.0);
        assert_eq!(w.p_value, 1.0);
        match s.grubbs {
            GrubbsOutcome::NotApplicable { reason } => {
                assert_eq!(
                    reason,
                    "all 3 runs have the same value, so no run stands out"
                );
            }
            GrubbsOutcome::Tested(_) => panic!("no spread, nothing to test"),
        }
    }

    #[test]
    fn zero_mean_has_no_rsd() {
        let s = summarize(&runs(&[-1.0, 1.0], &[1.0, 1.0])).unwrap();
        assert_eq!(s.mean, 0.0);
        assert!(s.rsd_percent.is_none());
    }

    #[test]
    fn runs_without_standard_errors_switch_weighting_off() {
        let mut r = runs(&[1.0, 2.0, 3.0, 4.0], &[0.1, f64::NAN, 0.0, 0.1]);
        r[3].std_error = -0.1;
        let s = summarize(&r).unwrap();
        assert!(s.weighted.is_none());
        assert!(s.fit_vs_scatter.is_none());
        let omitted = s.weighted_omitted.unwrap();
        assert_eq!(omitted.runs, ["r2", "r3", "r4"]);
        assert_eq!(
            omitted.reason,
            "weighted statistics left out: 3 of 4 runs have no usable standard error (r2, r3, r4)"
        );
        // The plain statistics do not need standard errors: mean 2.5 by hand.
        assert_eq!(s.mean, 2.5);
        assert!(matches!(s.grubbs, GrubbsOutcome::Tested(_)));
    }

    #[test]
    fn infinite_standard_error_is_not_usable() {
        let s = summarize(&runs(&[1.0, 2.0], &[0.1, f64::INFINITY])).unwrap();
        assert_eq!(s.weighted_omitted.unwrap().runs, ["r2"]);
    }

    #[test]
    fn too_few_runs_and_bad_values_are_errors() {
        assert_eq!(
            summarize(&runs(&[1.0], &[0.1])).unwrap_err().to_string(),
            "too few runs: 1 given, at least 2 needed"
        );
        assert_eq!(
            summarize(&[]).unwrap_err().to_string(),
            "too few runs: 0 given, at least 2 needed"
        );
        assert_eq!(
            summarize(&runs(&[1.0, f64::NAN, 3.0], &[0.1; 3]))
                .unwrap_err()
                .to_string(),
            "run 1 `r2` has non-finite value NaN"
        );
        assert_eq!(
            summarize(&runs(&[1.0, f64::NEG_INFINITY], &[0.1; 2]))
                .unwrap_err()
                .to_string(),
            "run 1 `r2` has non-finite value -inf"
        );
    }

    #[test]
    fn overflow_is_an_error_not_a_nan() {
        // Each value is finite, but the squared deviation from the mean,
        // (1.7e308)², is not.
        assert_eq!(
            summarize(&runs(&[-1.7e308, 1.7e308], &[1.0; 2]))
                .unwrap_err()
                .to_string(),
            "the standard deviation of the runs is not finite in double precision"
        );
    }

    #[test]
    fn tiny_standard_errors_do_not_overflow_the_weights() {
        // 1/σ² = 1e400 would overflow; the relative weights do not. Equal σ,
        // so x̄_w is the plain mean 1.5 and χ² = 2·(0.5/1e-200)² = 5e399 is
        // itself too large, which must be an error rather than an infinite
        // Birge ratio.
        assert_eq!(
            summarize(&runs(&[1.0, 2.0], &[1e-200; 2]))
                .unwrap_err()
                .to_string(),
            "the chi-squared of the runs is not finite in double precision"
        );
        // With values that agree to the same scale, everything stays finite:
        // χ² = 2·(0.5e-200/1e-200)² = 0.5, internal SE = 1e-200/√2.
        let s = summarize(&runs(&[1e-200, 2e-200], &[1e-200; 2])).unwrap();
        let w = s.weighted.unwrap();
        assert_close(w.chi_squared, 0.5, 1e-12, "chi2");
        assert_close(
            w.internal_std_error,
            1e-200 / 2f64.sqrt(),
            1e-12,
            "internal se",
        );
    }

    #[test]
    fn summary_serializes() {
        let s = summarize(&runs(&[7.0e-10, 7.2e-10, 7.4e-10], &[0.2e-10; 3])).unwrap();
        let json = serde_json::to_value(&s).unwrap();
        assert_eq!(json["n"], 3);
        assert_eq!(json["grubbs"]["kind"], "tested");
        assert_eq!(json["grubbs"]["outlier"], false);
        assert!(json["weighted"]["birge_ratio"].is_number());
    }
}
