//! The fitting window: where the double-layer charging has decayed (lower bound) and before
//! natural convection or edge diffusion bends the transient (upper bound), each bound with the
//! reason it sits where it does.

use nalgebra::DVector;
use serde::Serialize;

use crate::models::planar::ShiftedCottrellCharging;
use crate::regression::NoiseModel;
use crate::solver::{SolveOptions, solve};

/// A bound chosen automatically or given.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Default)]
#[serde(rename_all = "snake_case", tag = "kind", content = "s")]
pub enum BoundChoice {
    /// Found by the rules below.
    #[default]
    Auto,
    /// Given, in s after the step.
    At(f64),
}

/// The rules for automatic bounds.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WindowOptions {
    /// Lower bound.
    pub lo: BoundChoice,
    /// Upper bound.
    pub hi: BoundChoice,
    /// The window starts at k·τ after the step, τ = Ru·Cdl. Default 5; 5–10 τ is common
    /// practice, with no single source.
    pub k_tau: f64,
    /// The window also starts no earlier than where the fitted charging current is below this
    /// fraction of the faradaic current (default 0.001: a 1 % remnant was seen to bias D by
    /// 0.1 % on low-noise synthetic transients, which is more than their interval).
    pub charging_fraction: f64,
    /// Instrument rise time in s, if known: the window starts no earlier than k times it.
    pub rise_time_s: Option<f64>,
    /// Uncompensated resistance in Ω, if known (with `cdl_f`, gives τ without estimating it).
    pub ru_ohm: Option<f64>,
    /// Double-layer capacitance in F, if known.
    pub cdl_f: Option<f64>,
    /// The window ends where the edge share √(πDt)/r of a disk reaches this (default 0.1).
    pub edge_share_limit: f64,
    /// z above which a log-time bin of I·√t counts as departing from the plateau (default 4).
    pub departure_z: f64,
    /// Fewest points a window may hold (default 20).
    pub min_points: usize,
}

impl Default for WindowOptions {
    fn default() -> Self {
        WindowOptions {
            lo: BoundChoice::Auto,
            hi: BoundChoice::Auto,
            k_tau: 5.0,
            charging_fraction: 0.001,
            rise_time_s: None,
            ru_ohm: None,
            cdl_f: None,
            edge_share_limit: 0.1,
            departure_z: 4.0,
            min_points: 20,
        }
    }
}

/// Why a bound is where it is.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "rule")]
pub enum BoundReason {
    /// Given by the user.
    Given,
    /// k·τ after the step, τ = Ru·Cdl estimated from the early transient or entered.
    ChargingTime {
        /// τ in s.
        tau_s: f64,
        /// The multiple k.
        k: f64,
    },
    /// Where the fitted charging current falls below a fraction of the faradaic current.
    ChargingFraction {
        /// The fraction.
        fraction: f64,
    },
    /// Where the fitted charging current falls below a tenth of the noise of the current: on a
    /// quiet trace a remnant of 0.1 % of the faradaic current is many noise standard deviations
    /// and biases D beyond its own interval.
    ChargingBelowNoise {
        /// The noise standard deviation in A.
        noise_sd_a: f64,
    },
    /// After the leading points whose excess over the Cottrell line is significant (τ itself
    /// could not be estimated, usually because it is shorter than the sampling interval).
    ChargingExcess {
        /// Leading points excluded.
        points: usize,
        /// Whether τ itself was resolved (then the excess rule reached further than k·τ).
        tau_resolved: bool,
    },
    /// k times the instrument rise time.
    RiseTime {
        /// Rise time in s.
        rise_time_s: f64,
        /// The multiple k.
        k: f64,
    },
    /// The first sample after the step (no charging was detected).
    FirstSample,
    /// Before the bin where I·√t rises above its plateau: natural convection.
    Convection {
        /// Onset in s.
        onset_s: f64,
        /// z of the first departing bin.
        z: f64,
    },
    /// Before the bin where I·√t falls below its plateau (depletion or slow kinetics, not
    /// convection).
    FallsBelowPlateau {
        /// Where it starts, in s.
        onset_s: f64,
        /// z of the first departing bin.
        z: f64,
    },
    /// Where the edge share √(πDt)/r reaches the limit.
    EdgeDiffusion {
        /// The limit.
        share: f64,
        /// Radius used, in m.
        radius_m: f64,
    },
    /// The end of the data.
    EndOfData,
}

impl BoundReason {
    /// A plain-language sentence.
    pub fn describe(&self) -> String {
        match self {
            BoundReason::Given => "set by the user".to_owned(),
            BoundReason::ChargingTime { tau_s, k } => format!(
                "{k} × the charging time constant τ = Ru·Cdl = {}",
                crate::fmt_s(*tau_s)
            ),
            BoundReason::ChargingFraction { fraction } => format!(
                "where the fitted charging current falls below {} % of the faradaic current",
                fraction * 100.0
            ),
            BoundReason::ChargingBelowNoise { noise_sd_a } => format!(
                "where the fitted charging current falls below a tenth of the noise of the current (σ = {})",
                diffusor_trace::format_si(*noise_sd_a, "A", 2)
            ),
            BoundReason::ChargingExcess {
                points,
                tau_resolved,
            } => format!(
                "after the first {points} points, whose current exceeds the Cottrell line significantly ({})",
                if *tau_resolved {
                    "charging; this reaches further than k·τ and the 0.1 % point of the fitted charging current"
                } else {
                    "charging; τ not resolvable at this sampling rate"
                }
            ),
            BoundReason::RiseTime { rise_time_s, k } => format!(
                "{k} × the instrument rise time {}",
                crate::fmt_s(*rise_time_s)
            ),
            BoundReason::FirstSample => {
                "the first sample after the step (no charging current detected)".to_owned()
            }
            BoundReason::Convection { onset_s, z } => format!(
                "before natural convection: I·√t rises above its plateau from {} (z = {z:.1})",
                crate::fmt_s(*onset_s)
            ),
            BoundReason::FallsBelowPlateau { onset_s, z } => format!(
                "before I·√t falls below its plateau from {} (z = {z:.1}); not convection — depletion, a thin layer or kinetics",
                crate::fmt_s(*onset_s)
            ),
            BoundReason::EdgeDiffusion { share, radius_m } => format!(
                "where edge diffusion reaches {} % of the current (√(πDt)/r with r = {})",
                share * 100.0,
                diffusor_trace::format_si(*radius_m, "m", 3)
            ),
            BoundReason::EndOfData => "the end of the data".to_owned(),
        }
    }
}

/// One bound as decided.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Bound {
    /// Time in s after the step.
    pub time_s: f64,
    /// Whether it was found automatically.
    pub automatic: bool,
    /// Why it is there.
    pub reason: BoundReason,
    /// The plain-language reason.
    pub description: String,
}

impl Bound {
    pub(crate) fn new(time_s: f64, automatic: bool, reason: BoundReason) -> Bound {
        Bound {
            time_s,
            automatic,
            description: reason.describe(),
            reason,
        }
    }
}

/// The double-layer charging as estimated.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Charging {
    /// τ = Ru·Cdl in s.
    pub tau_s: f64,
    /// Standard error of τ in s, when fitted.
    pub tau_std_error_s: Option<f64>,
    /// Charging current at t = 0, ΔE/Ru, in A, when fitted.
    pub amplitude_a: Option<f64>,
    /// Whether τ was fitted (exponential plus Cottrell on the early transient) or entered.
    pub fitted: bool,
    /// Points used in the fit.
    pub points: usize,
}

/// Fits Cottrell with a free onset plus the charging current,
/// `I = S·(t − t0)^-½ + b + A·exp(−t/τ)`, to the first `early` points together with the
/// provisional span `span` (at most 2000 of its points, strided), which anchors S and b; past
/// 400 early points, the first 100 and 300 log-spaced ones stand for them.
///
/// t0 is fitted with the charging term because the two are confounded at short times: an
/// onset a fraction of a sample off leaves an early excess (or deficit) that an exponential
/// fitted alone mistakes for charging, and a charging tail pulls an onset fitted alone. The
/// start comes from linear least squares in (S, b, A) on a grid of τ; Levenberg–Marquardt
/// polishes it. Returns the charging, t0 (s, relative to the given times) and the residual
/// standard deviation (A; the noise with the charging modelled, which a line fitted past a
/// charging tail overstates), or `None` when τ
/// is not resolved: the amplitude or τ not significant at 3 standard errors, τ beyond the
/// early points, the charging current at the second sample below 3 noise standard deviations,
/// a t0 after the first sample, or a failed fit.
pub(crate) fn estimate_charging(
    time_s: &[f64],
    current_a: &[f64],
    early: usize,
    span: (usize, usize),
    fit_intercept: bool,
    noise_sd_a: f64,
) -> Option<(Charging, f64, f64)> {
    let early = early.min(time_s.len());
    if early < 6 {
        return None;
    }
    let (pa, pb) = (span.0.max(early), span.1.min(time_s.len()));
    let stride = (pb.saturating_sub(pa) / 2000).max(1);
    // The early points: all of the first 400, beyond that the first 100 and 300 log-spaced.
    let early_rows: Vec<usize> = if early <= 400 {
        (0..early).collect()
    } else {
        let ratio = (early as f64 / 100.0).ln() / 300.0;
        let mut v: Vec<usize> = (0..100)
            .chain((0..300).map(|k| (100.0 * (ratio * f64::from(k)).exp()) as usize))
            .filter(|&i| i < early)
            .collect();
        v.dedup();
        v
    };
    let rows: Vec<usize> = early_rows
        .into_iter()
        .chain((pa..pb).step_by(stride))
        .collect();
    let t: Vec<f64> = rows.iter().map(|&i| time_s[i]).collect();
    let y: Vec<f64> = rows.iter().map(|&i| current_a[i]).collect();
    let t_early_end = time_s[early - 1];
    // Start: the best τ of a log grid, with S, b and A linear in it.
    let mut best: Option<(f64, f64, [f64; 3])> = None;
    let (g_lo, g_hi) = ((0.3 * time_s[0]).ln(), t_early_end.ln());
    let cols = if fit_intercept { 3 } else { 2 };
    for k in 0..=30 {
        let tau = (g_lo + (g_hi - g_lo) * f64::from(k) / 30.0).exp();
        let x = nalgebra::DMatrix::from_fn(t.len(), cols, |i, j| match (j, fit_intercept) {
            (0, _) => 1.0 / t[i].sqrt(),
            (1, true) => 1.0,
            _ => (-t[i] / tau).exp(),
        });
        let qr = x.clone().qr();
        let qty = qr.q().transpose() * DVector::from_column_slice(&y);
        let Some(c) = qr.r().solve_upper_triangular(&qty) else {
            continue;
        };
        let fitted = &x * &c;
        let rss: f64 = y
            .iter()
            .zip(fitted.iter())
            .map(|(a, b)| (a - b).powi(2))
            .sum();
        let (s0, b0, a0) = if fit_intercept {
            (c[0], c[1], c[2])
        } else {
            (c[0], 0.0, c[1])
        };
        if a0 > 0.0 && best.is_none_or(|b| rss < b.0) {
            best = Some((rss, tau, [s0, b0, a0]));
        }
    }
    let (_, tau0, [s0, b0, a0]) = best?;
    let mut p0 = vec![s0];
    if fit_intercept {
        p0.push(b0);
    }
    p0.extend([0.0, a0.ln(), tau0.ln()]);
    let problem = ShiftedCottrellCharging {
        time_s: &t,
        current_a: &y,
        intercept: fit_intercept,
    };
    let fit = solve(&problem, DVector::from_vec(p0), &SolveOptions::default()).ok()?;
    let q = fit.parameters.len();
    let (t0, ln_a, ln_tau) = (
        fit.parameters[q - 3],
        fit.parameters[q - 2],
        fit.parameters[q - 1],
    );
    let (se_ln_a, se_ln_tau) = (fit.standard_errors[q - 2], fit.standard_errors[q - 1]);
    // Significant at 3 standard errors: on the log scale, a relative error below 1/3.
    if !(se_ln_a < 1.0 / 3.0 && se_ln_tau < 1.0 / 3.0) {
        return None;
    }
    let tau = ln_tau.exp();
    // τ must lie inside the early points, not beyond them, or it is an artefact of the fit;
    // and the onset cannot come after the first sample.
    if !(tau > 0.0 && tau < t_early_end && t0 < time_s[0]) {
        return None;
    }
    // The charging current must stand above the noise at the second sample too: an
    // exponential that only touches the first point fits that point's noise, not a τ.
    if !(ln_a.exp() * (-time_s[1] / tau).exp() > 3.0 * noise_sd_a) {
        return None;
    }
    Some((
        Charging {
            tau_s: tau,
            tau_std_error_s: Some(tau * se_ln_tau),
            amplitude_a: Some(ln_a.exp()),
            fitted: true,
            points: rows.len(),
        },
        t0,
        fit.residual_standard_deviation,
    ))
}

/// The smallest t ≥ τ/2 after which A·e^(−t/τ) < f·S·t^-½ (the ratio decreases for t > τ/2).
pub(crate) fn fraction_time(amplitude: f64, tau: f64, slope: f64, fraction: f64) -> f64 {
    let ratio = |t: f64| amplitude * (-t / tau).exp() * t.sqrt() / (fraction * slope);
    let mut lo = 0.5 * tau;
    if ratio(lo) < 1.0 {
        return lo;
    }
    let mut hi = lo;
    while ratio(hi) >= 1.0 && hi < 1e6 * tau {
        hi *= 2.0;
    }
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if ratio(mid) >= 1.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    hi
}

/// The plateau check on I·√t in log-spaced bins.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlateauCheck {
    /// Bin centres (geometric mean time) in s.
    pub bin_time_s: Vec<f64>,
    /// Mean I·√t per bin in A·s^½.
    pub bin_value: Vec<f64>,
    /// Standard error of each bin mean (corrected for the autocorrelation of the noise).
    pub bin_std_error: Vec<f64>,
    /// z of each bin against the plateau extrapolated from the bins before it (NaN for the
    /// reference bins).
    pub bin_z: Vec<f64>,
    /// Where I·√t first departs upward for two bins in a row (convection), in s.
    pub rises_from_s: Option<f64>,
    /// Where it first departs downward for two bins in a row, in s.
    pub falls_from_s: Option<f64>,
    /// z at the first departing bin.
    pub departure_z: f64,
    /// The criterion in words.
    pub criterion: String,
}

/// Bins of I·√t from `t_from` on, ten per decade, at least eight points each; each bin is
/// compared with the plateau (I·√t = S + b·√t, or S alone without an intercept) fitted to the
/// bins before it, and the first of two consecutive bins beyond `z_limit` marks a departure.
#[allow(clippy::too_many_arguments)] // Each is one number of the test; a struct would only rename them.
pub(crate) fn plateau_check(
    time_s: &[f64],
    current_a: &[f64],
    t_from: f64,
    t0: f64,
    intercept: bool,
    noise_sd_a: f64,
    noise: NoiseModel,
    z_limit: f64,
    charging: Option<(f64, f64)>,
) -> PlateauCheck {
    let tt = |m: usize| time_s[m] - t0;
    // The fitted charging tail, A·e^(−t/τ), comes off the current: a remnant of 0.1 % of the
    // faradaic current is many standard errors of a bin mean on a quiet trace, and would read
    // as a departure from the plateau. Past 50 τ it is below 10⁻²¹ of A and is skipped.
    let (amp, tau) = charging.unwrap_or((0.0, 0.0));
    let tail_end = 50.0 * tau;
    let faradaic = |m: usize| {
        let t = time_s[m];
        if t < tail_end {
            current_a[m] - amp * (-t / tau).exp()
        } else {
            current_a[m]
        }
    };
    let start = time_s.partition_point(|&t| t < t_from);
    let per_decade = 10.0;
    let n = time_s.len();
    // Bin edges first (cheap), then the sums over the points, split across threads.
    let mut edges = vec![start];
    let mut i = start;
    while i < n {
        let edge = time_s[i] * 10f64.powf(1.0 / per_decade);
        let mut j = time_s[i..].partition_point(|&t| t < edge) + i;
        j = j.max(i + 8).min(n);
        if n - j < 8 {
            j = n;
        }
        edges.push(j);
        i = j;
    }
    let nb = edges.len() - 1;
    // Per bin: Σ I·√t, and the squared differences of neighbouring I·√t with their count
    // (the bin's own noise, which a trend inside the bin barely touches).
    // Where the charging tail is still subtracted; past it the current is read as it is.
    let tail_index = time_s.partition_point(|&t| t < tail_end);
    let partial = crate::regression::chunked_ranges(n - start, |a, b| {
        let (a, b) = (a + start, b + start);
        let mut sums = vec![0.0; nb];
        let mut roots = vec![0.0; nb];
        let mut diff2 = vec![0.0; nb];
        let mut pairs = vec![0u32; nb];
        let mut k = edges.partition_point(|&e| e <= a).saturating_sub(1);
        let mut from = a;
        while from < b {
            // The part of bin k inside this thread's range; a neighbour pair across a bin
            // edge or a thread's edge is not counted.
            let to = edges[k + 1].min(b);
            let s = bin_part(time_s, current_a, t0, from, to, tail_index, &faradaic);
            sums[k] += s.0;
            roots[k] += s.1;
            diff2[k] += s.2;
            pairs[k] += u32::try_from(to - from - 1).unwrap_or(u32::MAX);
            from = to;
            k += 1;
        }
        (sums, roots, diff2, pairs)
    });
    let mut sums = vec![0.0; nb];
    let mut roots = vec![0.0; nb];
    let mut diff2 = vec![0.0; nb];
    let mut pairs = vec![0u32; nb];
    for (ps, pr, pd, pp) in partial {
        for k in 0..nb {
            sums[k] += ps[k];
            roots[k] += pr[k];
            diff2[k] += pd[k];
            pairs[k] += pp[k];
        }
    }
    let mut bin_time_s = Vec::with_capacity(nb);
    let mut bin_value = Vec::with_capacity(nb);
    let mut bin_std_error = Vec::with_capacity(nb);
    let mut bin_start_s = Vec::with_capacity(nb);
    // The mean of √t over each bin's points is the plateau's regressor: √ of the bin's
    // centre is not, by a share that depends on the bin's width, and the last, narrower bin
    // then stood thousands of standard errors off the plateau on a quiet trace.
    let bin_root: Vec<f64> = (0..nb)
        .map(|k| roots[k] / (edges[k + 1] - edges[k]) as f64)
        .collect();
    for k in 0..nb {
        let (i, j) = (edges[k], edges[k + 1]);
        let count = (j - i) as f64;
        // The current's noise, scaled by √t into I·√t, averaged over correlated samples; the
        // bin's time is the geometric mean of its ends.
        let t_mid = (tt(i) * tt(j - 1)).sqrt();
        // The larger of the provisional fit's noise and the bin's own: noise that changes along
        // the transient (a current range's resolution, the digits an export keeps) would
        // otherwise make the early bins look far more precise than they are.
        let own = if pairs[k] > 0 {
            diff2[k] / (2.0 * f64::from(pairs[k]))
        } else {
            0.0
        };
        let sd_y = (noise_sd_a * noise_sd_a * t_mid).max(own).sqrt();
        let se = sd_y * (noise.mean_variance_factor(j - i) / count).sqrt();
        bin_time_s.push(t_mid);
        bin_value.push(sums[k] / count);
        bin_std_error.push(se);
        bin_start_s.push(time_s[i]);
    }

    let mut bin_z = vec![f64::NAN; nb];
    let reference = 4;
    for k in reference..nb {
        // Weighted fit of the plateau model to the bins before k, then predict bin k.
        let (pred, var, chi2) = plateau_predict(
            &bin_root[..k],
            &bin_value[..k],
            &bin_std_error[..k],
            bin_root[k],
            intercept,
        );
        // When the bins before k scatter about their plateau more than their standard errors
        // allow, those errors are too small (noise the model does not know, such as the digits
        // an export keeps); both sides of the comparison are scaled up by the reduced χ².
        let se = ((bin_std_error[k].powi(2) + var) * chi2.max(1.0)).sqrt();
        bin_z[k] = if se > 0.0 {
            (bin_value[k] - pred) / se
        } else {
            0.0
        };
    }
    let mut rises_from_s = None;
    let mut falls_from_s = None;
    let mut departure_z = f64::NAN;
    for k in reference..nb {
        let next = if k + 1 < nb { bin_z[k + 1] } else { bin_z[k] };
        if rises_from_s.is_none() && bin_z[k] > z_limit && next > z_limit {
            rises_from_s = Some(bin_start_s[k]);
            if falls_from_s.is_none() {
                departure_z = bin_z[k];
            }
        }
        if falls_from_s.is_none() && bin_z[k] < -z_limit && next < -z_limit {
            falls_from_s = Some(bin_start_s[k]);
            if rises_from_s.is_none() {
                departure_z = bin_z[k];
            }
        }
    }
    PlateauCheck {
        bin_time_s,
        bin_value,
        bin_std_error,
        bin_z,
        rises_from_s,
        falls_from_s,
        departure_z,
        criterion: format!(
            "I·√t in log-time bins (10 per decade, at least 8 points each; standard errors from the noise of a provisional fit, σ = {}, white plus AR(1) with c = {:.2}, φ = {:.3}, read from the variogram of its residuals); a bin departs when it lies more than {z_limit} standard errors from the plateau {} fitted to all earlier bins, and the first of two departing bins in a row marks the onset",
            diffusor_trace::format_si(noise_sd_a, "A", 2),
            noise.c,
            noise.phi,
            if intercept { "S + b·√t" } else { "S" },
        ),
    }
}

/// Σ I·√t, Σ √t and Σ (ΔI·√t)² of neighbours over rows `from..to` of one bin, with
/// √t = √(time − t0) and I = `faradaic(m)` before `tail_index`, the current itself after it.
/// Rows go through a buffer a block at a time, so the square roots are computed packed, and
/// the sums run in four interleaved lanes; this pass reads every point after the lower bound.
fn bin_part(
    time_s: &[f64],
    current_a: &[f64],
    t0: f64,
    from: usize,
    to: usize,
    tail_index: usize,
    faradaic: &dyn Fn(usize) -> f64,
) -> (f64, f64, f64) {
    const BLOCK: usize = 512;
    const L: usize = 4;
    let mut root = [0.0; BLOCK];
    let mut value = [0.0; BLOCK];
    let (mut sum, mut sum_root, mut diff2) = ([0.0; L], [0.0; L], [0.0; L]);
    let mut prev = f64::NAN;
    let mut a = from;
    while a < to {
        let e = (a + BLOCK).min(to);
        let m = e - a;
        let (root, value) = (&mut root[..m], &mut value[..m]);
        for (r, &t) in root.iter_mut().zip(&time_s[a..e]) {
            *r = (t - t0).sqrt();
        }
        for ((v, &r), &c) in value.iter_mut().zip(root.iter()).zip(&current_a[a..e]) {
            *v = c * r;
        }
        for (j, v) in value
            .iter_mut()
            .enumerate()
            .take(tail_index.saturating_sub(a))
        {
            *v = faradaic(a + j) * root[j];
        }
        // The first row's pair reaches back to the previous block (none for the bin's first).
        if !prev.is_nan() {
            diff2[0] += (value[0] - prev) * (value[0] - prev);
        }
        prev = value[m - 1];
        let (vq, v_rest) = value.as_chunks::<L>();
        let (rq, r_rest) = root.as_chunks::<L>();
        for (vq, rq) in vq.iter().zip(rq) {
            for l in 0..L {
                sum[l] += vq[l];
                sum_root[l] += rq[l];
            }
        }
        for (l, (&v, &r)) in v_rest.iter().zip(r_rest).enumerate() {
            sum[l] += v;
            sum_root[l] += r;
        }
        let (dq, d_rest) = value[1..].as_chunks::<L>();
        let (pq, p_rest) = value[..m - 1].as_chunks::<L>();
        for (dq, pq) in dq.iter().zip(pq) {
            for l in 0..L {
                let d = dq[l] - pq[l];
                diff2[l] += d * d;
            }
        }
        for (l, (&v, &p)) in d_rest.iter().zip(p_rest).enumerate() {
            diff2[l] += (v - p) * (v - p);
        }
        a = e;
    }
    let total = |x: [f64; L]| (x[0] + x[1]) + (x[2] + x[3]);
    (total(sum), total(sum_root), total(diff2))
}

/// The plateau `c0 + c1·√t` fitted to the reference bins (`root` their mean √t), predicted at
/// `at` (a bin's mean √t): (value, its variance, the reduced χ² of the reference bins about
/// the fit, 1 when there are no degrees of freedom).
fn plateau_predict(
    root: &[f64],
    y: &[f64],
    se: &[f64],
    at: f64,
    intercept: bool,
) -> (f64, f64, f64) {
    let w: Vec<f64> = se
        .iter()
        .map(|s| 1.0 / (s * s).max(f64::MIN_POSITIVE))
        .collect();
    let sw: f64 = w.iter().sum();
    let ym = w.iter().zip(y).map(|(w, y)| w * y).sum::<f64>() / sw;
    let reduced = |model: &dyn Fn(f64) -> f64, p: usize| -> f64 {
        let dof = root.len().saturating_sub(p);
        if dof == 0 {
            return 1.0;
        }
        let chi2: f64 = w
            .iter()
            .zip(root)
            .zip(y)
            .map(|((w, x), y)| w * (y - model(*x)).powi(2))
            .sum();
        chi2 / dof as f64
    };
    if !intercept {
        return (ym, 1.0 / sw, reduced(&|_| ym, 1));
    }
    // y = c0 + c1·√t, weighted, centred on the weighted mean of √t.
    let xm = w.iter().zip(root).map(|(w, x)| w * x).sum::<f64>() / sw;
    let mut sxx = 0.0;
    let mut sxy = 0.0;
    for ((w, x), y) in w.iter().zip(root).zip(y) {
        let dx = x - xm;
        sxx += w * dx * dx;
        sxy += w * dx * (y - ym);
    }
    if !(sxx > 0.0) {
        return (ym, 1.0 / sw, reduced(&|_| ym, 1));
    }
    let c1 = sxy / sxx;
    let dx = at - xm;
    (
        ym + c1 * dx,
        1.0 / sw + dx * dx / sxx,
        reduced(&|x| ym + c1 * (x - xm), 2),
    )
}

/// Level shifts that look like current-range switching: a jump between neighbouring residuals
/// far above their sample-to-sample scatter (12 robust standard deviations, over the window
/// and among the 32 neighbouring differences), more than three of the current's smallest
/// nonzero steps nearby (the file's resolution), and that persists (the means of the five
/// residuals on each side differ by more than 60 % of it, in its direction).
/// `residual(i)` gives the residual of sample i of `time_s`. Returns the times of the first
/// sample after each jump.
///
/// Most neighbour pairs cannot hold such a jump and are screened out without evaluating the
/// model: in a block of 4096 samples no residual difference exceeds the current's difference
/// by more than the model's variation over the block, `variation(a, b)`, so the residuals are
/// computed only where `|ΔI|` comes within that of the limit.
pub(crate) fn range_switches(
    time_s: &[f64],
    current_a: &[f64],
    residual: impl Fn(usize) -> f64 + Sync,
    variation: impl Fn(usize, usize) -> f64 + Sync,
) -> Vec<f64> {
    const BLOCK: usize = 4096;
    let n = time_s.len();
    if n < 20 {
        return Vec::new();
    }
    // The sampled differences, split across the cores: each is a scattered read of the long
    // columns and two square roots.
    let stride = (n / 200_000).max(1);
    let samples = (n - 1).div_ceil(stride);
    let mut d: Vec<f64> = crate::regression::chunked_ranges(samples, |a, b| {
        (a..b)
            .map(|k| {
                let i = 1 + k * stride;
                (residual(i) - residual(i - 1)).abs()
            })
            .collect::<Vec<f64>>()
    })
    .concat();
    let mid = d.len() / 2;
    let mad = *d.select_nth_unstable_by(mid, f64::total_cmp).1;
    let sigma = 1.4826 * mad;
    if !(sigma > 0.0) {
        return Vec::new();
    }
    let limit = 12.0 * sigma;
    // The robust scatter of the 16 neighbour differences on each side of i (the jump itself
    // left out): noise that changes along the transient, such as the digits an export keeps,
    // sets a local scale the global one understates at short times.
    let local_sigma = |i: usize| {
        let mut d: Vec<f64> = (i.saturating_sub(16).max(1)..(i + 17).min(n))
            .filter(|&j| j != i)
            .map(|j| (residual(j) - residual(j - 1)).abs())
            .collect();
        let mid = d.len() / 2;
        1.4826 * *d.select_nth_unstable_by(mid, f64::total_cmp).1
    };
    // The smallest nonzero step of the current among the same neighbours: on a smooth trace
    // written with few digits, the residuals climb in steps of the last digit, and a step of
    // a few of those is the file's resolution, not a change of range.
    let local_quantum = |i: usize| {
        let q = (i.saturating_sub(16).max(1)..(i + 17).min(n))
            .filter(|&j| j != i)
            .map(|j| (current_a[j] - current_a[j - 1]).abs())
            .filter(|&d| d > 0.0)
            .fold(f64::INFINITY, f64::min);
        // A flat neighbourhood has no resolution to speak of.
        if q.is_finite() { q } else { 0.0 }
    };
    let found = crate::regression::chunked_ranges(n, |a, b| {
        let mut out = Vec::new();
        let start = a.max(5);
        let end = b.min(n - 5);
        let mut i = start;
        while i < end {
            // Any residual jump inside [i, block_end) is at most |ΔI| plus the model's change.
            // At short times the model changes by more than the limit over a whole block, which
            // would leave every point to be checked one by one; halving the block until it does
            // not (down to 64 points) keeps the screen working there.
            let mut len = BLOCK;
            let (block_end, slack) = loop {
                let block_end = (i + len).min(end);
                let slack = variation(i - 1, block_end - 1);
                if slack < limit || len <= 64 {
                    break (block_end, slack);
                }
                len /= 2;
            };
            let screen = limit - slack;
            // Most blocks hold no current step above the screen at all; a branch-free look at
            // the whole block says so at the speed of reading the current.
            let (before, after) = (&current_a[i - 1..block_end - 1], &current_a[i..block_end]);
            let any = before
                .iter()
                .zip(after)
                .fold(false, |acc, (p, q)| acc | ((q - p).abs() > screen));
            if screen > 0.0 && !any {
                i = block_end;
                continue;
            }
            while i < block_end {
                if screen > 0.0 && (current_a[i] - current_a[i - 1]).abs() <= screen {
                    i += 1;
                    continue;
                }
                let jump = residual(i) - residual(i - 1);
                if jump.abs() > limit
                    && jump.abs() > 12.0 * local_sigma(i)
                    && (current_a[i] - current_a[i - 1]).abs() > 3.0 * local_quantum(i)
                {
                    let before = (i - 5..i).map(&residual).sum::<f64>() / 5.0;
                    let after = (i..i + 5).map(&residual).sum::<f64>() / 5.0;
                    if (after - before).abs() > 0.6 * jump.abs() && (after - before) * jump > 0.0 {
                        out.push(time_s[i]);
                        i += 5;
                        continue;
                    }
                }
                i += 1;
            }
        }
        out
    });
    found.into_iter().flatten().collect()
}

/// Where the provisional Cottrell line is fitted: the longest stretch over which I·√t stays
/// flat, judged on log-time bins (ten per decade) from at most 256 sampled points each.
///
/// Neighbouring bins count as flat when their I·√t differ by less than 1.15 % (a local power
/// law t^(−½ ± 0.05), our own tolerance) plus three standard errors of the difference, the
/// noise read from successive differences of the current. The stretch returned starts one bin
/// after the flat run begins (away from the charging tail) and spans at most two decades (away
/// from a slow convection rise). A fixed share of the log-time span would sit inside the
/// charging current whenever the sampling is fast against τ = Ru·Cdl, and a provisional line
/// fitted there throws off every later rule.
///
/// Returns the index range `(a, b)`, or `None` when no run of at least three flat bins exists.
pub(crate) fn provisional_span(time_s: &[f64], current_a: &[f64]) -> Option<(usize, usize)> {
    const PER_BIN: usize = 256;
    let n = time_s.len();
    if n < 40 || !(time_s[0] > 0.0) {
        return None;
    }
    let step = 10f64.powf(0.1);
    // (start index, end index, ln of mean I·√t, its standard error relative to the mean)
    let mut bins: Vec<(usize, usize, f64, f64)> = Vec::new();
    let mut i = 0;
    while i < n {
        let edge = time_s[i] * step;
        let mut j = time_s[i..].partition_point(|&t| t < edge) + i;
        j = j.max(i + 8).min(n);
        if n - j < 8 {
            j = n;
        }
        let m = j - i;
        let stride = m.div_ceil(PER_BIN).max(1);
        let (mut sum, mut count, mut diff2, mut pairs) = (0.0, 0usize, 0.0, 0usize);
        let mut k = i;
        while k < j {
            sum += current_a[k] * time_s[k].sqrt();
            count += 1;
            if k + 1 < j {
                let d = current_a[k + 1] - current_a[k];
                diff2 += d * d;
                pairs += 1;
            }
            k += stride;
        }
        let mean = sum / count as f64;
        if mean > 0.0 {
            let sd = if pairs > 0 {
                (diff2 / (2.0 * pairs as f64)).sqrt()
            } else {
                0.0
            };
            let t_mid = (time_s[i] * time_s[j - 1]).sqrt();
            let se = sd * t_mid.sqrt() / (count as f64).sqrt() / mean;
            bins.push((i, j, mean.ln(), se));
        } else {
            // A current of the wrong sign or zero has no Cottrell stretch here.
            bins.push((i, j, f64::NAN, f64::INFINITY));
        }
        i = j;
    }
    let flat = |k: usize| -> bool {
        let (a, b) = (bins[k], bins[k + 1]);
        let diff = (b.2 - a.2).abs();
        diff.is_finite() && diff < 0.0115 + 3.0 * (a.3 * a.3 + b.3 * b.3).sqrt()
    };
    // Longest run of bins joined by flat steps, by log-time span; the earliest wins a tie.
    let span = |(f, l): (usize, usize)| time_s[bins[l].1 - 1] / time_s[bins[f].0];
    let mut best: Option<(usize, usize)> = None;
    let mut k = 0;
    while k + 1 < bins.len() {
        if !flat(k) {
            k += 1;
            continue;
        }
        let first = k;
        while k + 1 < bins.len() && flat(k) {
            k += 1;
        }
        if best.is_none_or(|b| span((first, k)) > span(b)) {
            best = Some((first, k));
        }
    }
    let (first, last) = best?;
    if last - first < 2 {
        return None;
    }
    let a = bins[first + 1].0;
    let t_end = time_s[a] * 100.0;
    let b = bins[last].1.min(time_s.partition_point(|&t| t <= t_end));
    (b > a + 10).then_some((a, b))
}
