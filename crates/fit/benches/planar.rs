//! Automatic windows plus the planar Cottrell fit on a 10-million-point transient, timed against
//! two peers in numpy and scipy, each on the same data (piped to it) in the same run:
//!
//! - the *minimal* peer: a provisional `scipy.stats.linregress` over a fixed share of the
//!   log-time span, a mask of the leading points above it (charging), log bins of I·√t whose
//!   z-scores it never uses, and a final `linregress` over everything after the mask. It does
//!   much less than ours and is kept so the record can be compared with earlier runs.
//! - the *same-steps* peer: every step of `analyze_data` that touches the data, at the sizes
//!   ours works on, written as vectorised numpy — the provisional span from the flat stretch of
//!   I·√t, `linregress` for each line with ours' diagnostics (residual SD, R², lag-1
//!   autocorrelation, Durbin–Watson, runs test, the AR(1) noise model from lags 1–10 and the
//!   sandwich covariance, through `scipy.signal.lfilter` when the noise is correlated), the
//!   joint charging fit on the points before the span (a τ grid with the linear parameters by
//!   `numpy.linalg.lstsq`, then `scipy.optimize.least_squares` with the analytic Jacobian), the
//!   step onset refined three times the same way, the significant-excess rule, the variogram
//!   of 50 000 provisional residuals, the plateau bins of I·√t with their weighted plateau fits
//!   and z-scores, the edge-share bound, the final line over the window, the block-summed
//!   covariance of (S, b, t0), Student's t, the budget and the range-switch scan.
//!
//! Ours and the same-steps peer print D, its 95 % interval, t0 and the window side by side,
//! so a reader can see that both did the same job.
//!
//! Run with `cargo bench -p diffusor-fit --bench planar`.

use std::time::Duration;

mod support;

use criterion::Criterion;
use diffusor_fit::cell::{Cell, Measured};
use diffusor_fit::models::planar::cottrell_current_a;
use diffusor_fit::planar::{PlanarOptions, PlanarResult, analyze_data};

const N: usize = 10_000_000;
const DT: f64 = 1e-5;

/// A synthetic transient: Cottrell (D = 7e-10 m²/s, 3 mm disk, 1 mM) sampled every 10 µs for
/// 100 s, with deterministic pseudo-random noise of about 5 nA.
fn transient() -> (Vec<f64>, Vec<f64>) {
    let time: Vec<f64> = (1..=N).map(|k| k as f64 * DT).collect();
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let current = time
        .iter()
        .map(|&t| {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let u = (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
            cottrell_current_a(1.0, 7.07e-6, 1.0, 7e-10, t) + 1.7e-8 * u
        })
        .collect();
    (time, current)
}

/// Both peers. The current comes on standard input as little-endian f64 (the times are k·dt,
/// computed as ours computes them); each peer's best of 3 and the same-steps peer's results
/// go to standard output, one line each.
const PEER: &str = r##"
import os, sys, time
import numpy as np
from scipy import optimize, signal, stats

# The transient the bench generated, piped in: times are k·dt exactly as ours computes them,
# the current is ours bit for bit.
n, dt = 10_000_000, 1e-5
t = np.arange(1, n + 1) * dt
i = np.frombuffer(sys.stdin.buffer.read(), dtype="<f8")
assert i.size == n, i.size
F = 96485.33212331002
N_EL, AREA, U_AREA, CONC, U_CONC = 1.0, 7.07e-6, 7e-8, 1.0, 0.005
EDGE_LIMIT, DEPARTURE_Z, FRACTION, K_TAU = 1.0, 4.0, 1e-3, 5.0
EPS = np.finfo(float).eps
# Ours splits its long passes into one part per core (at most 8); the residual lags are read
# on the first 250 000 residuals of each part, so the peer reads the same ones.
try:
    CORES = min(max(len(os.sched_getaffinity(0)), 1), 8)
except AttributeError:
    CORES = min(max(os.cpu_count() or 1, 1), 8)
LAGS, LAG_POINTS = 10, 250_000


def minimal():
    """The old minimal peer, unchanged but for the data: one provisional line, a charging mask,
    log bins whose z it never uses, and a final linregress over everything after the mask."""
    x = 1.0 / np.sqrt(t)
    lt = np.log(t)
    a, b = np.searchsorted(lt, lt[0] + 0.25 * (lt[-1] - lt[0])), np.searchsorted(lt, lt[0] + 0.6 * (lt[-1] - lt[0]))
    p = stats.linregress(x[a:b], i[a:b])
    r = i - p.intercept - p.slope * x
    sd = r[a:b].std()
    sig = r[:a] > np.maximum(1e-3 * (p.slope * x[:a] + p.intercept), 3 * sd)
    lo = int(np.argmin(sig)) if sig.any() else 0
    y = i * np.sqrt(t)
    edges = np.searchsorted(t, t[lo] * 10 ** (np.arange(0, 8, 0.1)))
    edges = np.unique(edges[edges < n])
    sums = np.add.reduceat(y[lo:], edges - lo)
    counts = np.diff(np.append(edges, n))
    means = sums / counts
    z = (means[4:] - means[:4].mean()) / (sd * np.sqrt(t[edges[4:]]) / np.sqrt(counts[4:]))
    hi = n
    q = stats.linregress(x[lo:hi], i[lo:hi])
    return q.slope


# ---- the same steps as ours ----------------------------------------------------------------

def d_from_slope(s):
    return np.pi * (s / (N_EL * F * AREA * CONC)) ** 2


def noise_from_autocorrelation(rho, m):
    """c and φ of ρ(k) = c·φ^k: a line through ln ρ(k) over the leading significant lags."""
    limit = 2.0 / np.sqrt(m)
    sig = np.asarray(rho) > limit
    k = len(rho) if sig.all() else int(np.argmin(sig))
    if k == 0:
        return 0.0, 0.0
    if k == 1:
        return 1.0, float(np.clip(rho[0], 0.0, 0.999))
    line = stats.linregress(np.arange(1, k + 1), np.log(rho[:k]))
    return float(np.clip(np.exp(line.intercept), 0.0, 1.0)), float(np.clip(np.exp(line.slope), 1e-6, 0.999))


def mean_variance_factor(c, phi, k):
    k = np.asarray(k, dtype=float)
    if c == 0.0 or phi == 0.0:
        return np.ones_like(k)
    g = phi / (1 - phi) - phi * (1 - phi ** k) / (k * (1 - phi) ** 2)
    return np.where(k < 2, 1.0, 1.0 + 2.0 * c * g)


def from_variogram(r, max_lag):
    m = len(r)
    max_lag = max(min(max_lag, m // 4), 2)
    gamma = np.array([np.mean((r[k:] - r[:-k]) ** 2) / 2 for k in range(1, max_lag + 1)])
    tail = max(max_lag // 5, 1)
    s2 = gamma[-tail:].mean()
    if not s2 > 0:
        return 0.0, (0.0, 0.0)
    return np.sqrt(s2), noise_from_autocorrelation(1 - gamma / s2, m)


def runs_z(runs, pos, neg):
    tot = pos + neg
    if pos < 1 or neg < 1 or tot < 3:
        return np.nan
    mean = 2 * pos * neg / tot + 1
    var = 2 * pos * neg * (2 * pos * neg - tot) / (tot * tot * (tot - 1))
    return (runs - mean) / np.sqrt(var) if var > 0 else np.nan


def fit_line(tw, yw, t0):
    """I on (t − t0)^-½ by linregress, with ours' diagnostics: residual SD, R², lag-1
    autocorrelation, Durbin–Watson, runs test, the AR(1) noise model from lags 1–10 and the
    sandwich covariance."""
    x = 1.0 / np.sqrt(tw - t0)
    m = len(x)
    p = stats.linregress(x, yw)
    xm = x.mean()
    # linregress's two standard errors give back var(x) (intercept_se² = se²·(var x + x̄²)),
    # and with it the residual variance s² = se²·Σ(x − x̄)², without a pass over the residuals.
    ssxm = (p.intercept_stderr / p.stderr) ** 2 - xm * xm
    sxx = m * ssxm
    s2 = p.stderr ** 2 * sxx
    parts = CORES if m >= 200_000 else 1
    lags = np.zeros(LAGS)
    rr = diff = 0.0
    changes = pos = neg = 0
    for k in range(parts):
        a = m * k // parts
        e = min(m * (k + 1) // parts, a + LAG_POINTS)
        lo = max(a - LAGS, 0)
        r = yw[lo:e] - p.intercept - p.slope * x[lo:e]
        cur = r[a - lo:]
        for lag in range(1, LAGS + 1):
            s = max(a, lag) - lo
            lags[lag - 1] += r[s:] @ r[s - lag:len(r) - lag]
        rr += cur @ cur
        s = max(a, 1) - lo
        q, c = r[s - 1:-1], r[s:]
        diff += np.sum((c - q) ** 2)
        changes += int(np.count_nonzero((c != 0) & (q != 0) & ((c > 0) != (q > 0))))
        pos += int(np.count_nonzero(cur > 0))
        neg += int(np.count_nonzero(cur < 0))
    rho = lags / rr
    c, phi = noise_from_autocorrelation(rho, min(m, 8 * LAG_POINTS))

    def cov_from(mm):
        v_ac = s2 * mm[0] / (m * m)
        c_ab = s2 * mm[1] / (m * sxx)
        v_b = s2 * mm[2] / (sxx * sxx)
        return np.array([[v_b, c_ab - xm * v_b], [c_ab - xm * v_b, v_ac + xm * xm * v_b - 2 * xm * c_ab]])

    cov0 = cov_from([m, 0.0, sxx])
    cov = cov0
    if c > 0 and phi > 0:
        # Σᵢⱼ zᵢzⱼᵀ φ^|i−j| for z = [1, x − x̄]: h = φ·(h₋₁ + z₋₁) is one IIR filter per column.
        z1 = x - xm
        h0 = signal.lfilter([0.0, phi], [1.0, -phi], np.ones(m))
        h1 = signal.lfilter([0.0, phi], [1.0, -phi], z1)
        mp = [m + 2 * h0.sum(), z1.sum() + h1.sum() + h0 @ z1, z1 @ z1 + 2 * z1 @ h1]
        cov = cov_from([(1 - c) * mm + c * q for mm, q in zip([m, 0.0, sxx], mp)])
    eff = m / (1 + 2 * c * phi / (1 - phi))
    return dict(
        slope=p.slope, intercept=p.intercept, cov=cov, cov0=cov0, sd=np.sqrt(s2), r2=p.rvalue ** 2,
        lag1=rho[0], dw=diff / rr, runs_z=runs_z(changes + 1, pos, neg), c=c, phi=phi,
        eff=eff, dof=max(eff - 2, 1.0), x=x,
    )


def cov_from_jac(res, m):
    """s²·(JᵀJ)⁻¹ at the solution, through the SVD of J as curve_fit does it."""
    _, sv, vt = np.linalg.svd(res.jac, full_matrices=False)
    s2 = 2 * res.cost / (m - len(res.x))
    return (vt.T / sv ** 2) @ vt * s2, np.sqrt(s2)


def lm(fun, jac, p0):
    return optimize.least_squares(fun, p0, jac=jac, method="lm", x_scale="jac",
                                  ftol=1e-15, xtol=1e-15, gtol=EPS, max_nfev=10_000)


def refine_onset(tw, yw, s0, b0, t0_start):
    """t0 of I = S·(t − t0)^-½ + b by Levenberg–Marquardt on the first 5 000 points and about
    15 000 strided ones after them."""
    m = len(tw)
    dense = min(m, 5000)
    stride = max((m - dense) // 15000, 1)
    rows = np.r_[0:dense, dense:m:stride]
    tt, yy = tw[rows], yw[rows]

    def root(p):
        d = tt - p[2]
        return np.sqrt(np.where(d > 0, d, np.nan))

    def fun(p):
        return yy - p[0] / root(p) - p[1]

    def jac(p):
        r = root(p)
        return np.column_stack([-1 / r, -np.ones_like(r), -0.5 * p[0] / r ** 3])

    try:
        res = lm(fun, jac, [s0, b0, t0_start])
    except ValueError:
        return None
    if not res.success or not np.all(np.isfinite(res.fun)) or not res.x[2] < tw[0]:
        return None
    return res.x[2]


def estimate_charging(tm, ym, early, span, noise_sd):
    """The joint fit I = S·(t − t0)^-½ + b + A·exp(−t/τ) on the early points and the
    provisional span: a start from a τ grid with S, b, A linear, then Levenberg–Marquardt."""
    early = min(early, len(tm))
    if early < 6:
        return None
    pa, pb = max(span[0], early), min(span[1], len(tm))
    stride = max(max(pb - pa, 0) // 2000, 1)
    if early <= 400:
        er = np.arange(early)
    else:
        ratio = np.log(early / 100) / 300
        er = np.r_[np.arange(100), (100 * np.exp(ratio * np.arange(300))).astype(np.int64)]
        er = er[er < early]
        er = er[np.r_[True, er[1:] != er[:-1]]]
    rows = np.r_[er, np.arange(pa, pb, stride)]
    tt, yy = tm[rows], ym[rows]
    t_end = tm[early - 1]
    g_lo, g_hi = np.log(0.3 * tm[0]), np.log(t_end)
    best = None
    x = 1 / np.sqrt(tt)
    for k in range(31):
        tau = np.exp(g_lo + (g_hi - g_lo) * k / 30)
        X = np.column_stack([x, np.ones_like(x), np.exp(-tt / tau)])
        coef = np.linalg.lstsq(X, yy, rcond=None)[0]
        rss = np.sum((yy - X @ coef) ** 2)
        if coef[2] > 0 and (best is None or rss < best[0]):
            best = (rss, tau, coef)
    if best is None:
        return None
    _, tau0, (s0, b0, a0) = best

    def parts(p):
        d = tt - p[2]
        return np.sqrt(np.where(d > 0, d, np.nan)), np.exp(p[3]) * np.exp(-tt / np.exp(p[4]))

    def fun(p):
        r, e = parts(p)
        return yy - p[0] / r - p[1] - e

    def jac(p):
        r, e = parts(p)
        return np.column_stack([-1 / r, -np.ones_like(r), -0.5 * p[0] / r ** 3, -e, -e * tt / np.exp(p[4])])

    try:
        res = lm(fun, jac, [s0, b0, 0.0, np.log(a0), np.log(tau0)])
    except ValueError:
        return None
    if not res.success or not np.all(np.isfinite(res.fun)):
        return None
    cov, sd = cov_from_jac(res, len(tt))
    se = np.sqrt(np.maximum(np.diag(cov), 0))
    t0, ln_a, ln_tau = res.x[2:]
    if not (se[3] < 1 / 3 and se[4] < 1 / 3):
        return None
    tau = np.exp(ln_tau)
    if not (0 < tau < t_end and t0 < tm[0]):
        return None
    if not np.exp(ln_a) * np.exp(-tm[1] / tau) > 3 * noise_sd:
        return None
    return dict(tau=tau, amp=np.exp(ln_a), t0=t0, sd=sd)


def provisional_span(tm, ym):
    """The longest flat stretch of I·√t in ten-per-decade log bins (≤ 256 sampled points each)."""
    m = len(tm)
    if m < 40 or not tm[0] > 0:
        return None
    step = 10 ** 0.1
    bins = []
    a = 0
    while a < m:
        j = min(max(int(np.searchsorted(tm, tm[a] * step)), a + 8), m)
        if m - j < 8:
            j = m
        stride = max(-(-(j - a) // 256), 1)
        k = np.arange(a, j, stride)
        mean = np.sum(ym[k] * np.sqrt(tm[k])) / len(k)
        kk = k[k + 1 < j]
        d = ym[kk + 1] - ym[kk]
        if mean > 0:
            sd = np.sqrt(d @ d / (2 * len(kk))) if len(kk) else 0.0
            se = sd * np.sqrt(np.sqrt(tm[a] * tm[j - 1])) / np.sqrt(len(k)) / mean
            bins.append((a, j, np.log(mean), se))
        else:
            bins.append((a, j, np.nan, np.inf))
        a = j

    def flat(k):
        d = abs(bins[k + 1][2] - bins[k][2])
        return np.isfinite(d) and d < 0.0115 + 3 * np.hypot(bins[k][3], bins[k + 1][3])

    def span(fl):
        return tm[bins[fl[1]][1] - 1] / tm[bins[fl[0]][0]]

    best, k = None, 0
    while k + 1 < len(bins):
        if not flat(k):
            k += 1
            continue
        first = k
        while k + 1 < len(bins) and flat(k):
            k += 1
        if best is None or span((first, k)) > span(best):
            best = (first, k)
    if best is None or best[1] - best[0] < 2:
        return None
    a = bins[best[0] + 1][0]
    b = min(bins[best[1]][1], int(np.searchsorted(tm, tm[a] * 100.0, side="right")))
    return (a, b) if b > a + 10 else None


def plateau_predict(root, y, se, at):
    w = 1 / np.maximum(se * se, np.finfo(float).tiny)
    sw = w.sum()
    ym = w @ y / sw
    xm = w @ root / sw
    dx = root - xm
    sxx = w @ (dx * dx)
    dof = len(root) - 2
    if not sxx > 0:
        chi = 1.0 if len(root) < 2 else w @ (y - ym) ** 2 / (len(root) - 1)
        return ym, 1 / sw, chi
    c1 = w @ (dx * (y - ym)) / sxx
    chi = 1.0 if dof <= 0 else w @ (y - ym - c1 * dx) ** 2 / dof
    return ym + c1 * (at - xm), 1 / sw + (at - xm) ** 2 / sxx, chi


def plateau_check(tm, ym, t_from, t0, noise_sd, noise, tail):
    """I·√t in ten-per-decade log bins from the lower bound, each against the plateau S + b·√t
    fitted (weighted) to the bins before it."""
    m = len(tm)
    start = int(np.searchsorted(tm, t_from))
    edges = [start]
    a = start
    step = 10 ** 0.1
    while a < m:
        j = min(max(int(np.searchsorted(tm, tm[a] * step)), a + 8), m)
        if m - j < 8:
            j = m
        edges.append(j)
        a = j
    edges = np.array(edges)
    root = np.sqrt(tm[start:] - t0)
    v = ym[start:] * root
    if tail is not None:
        amp, tau = tail
        k = int(np.searchsorted(tm, 50 * tau)) - start
        if k > 0:
            v[:k] = (ym[start:start + k] - amp * np.exp(-tm[start:start + k] / tau)) * root[:k]
    off = edges[:-1] - start
    sums = np.add.reduceat(v, off)
    roots = np.add.reduceat(root, off)
    d2 = np.diff(v) ** 2
    d2[edges[1:-1] - start - 1] = 0.0  # pairs across a bin edge are not the bin's own noise
    diff2 = np.add.reduceat(d2, off)
    count = np.diff(edges)
    pairs = count - 1
    bin_root = roots / count
    t_mid = np.sqrt((tm[edges[:-1]] - t0) * (tm[edges[1:] - 1] - t0))
    own = np.where(pairs > 0, diff2 / (2 * np.maximum(pairs, 1)), 0.0)
    sd_y = np.sqrt(np.maximum(noise_sd ** 2 * t_mid, own))
    se = sd_y * np.sqrt(mean_variance_factor(noise[0], noise[1], count) / count)
    value = sums / count
    nb = len(count)
    z = np.full(nb, np.nan)
    for k in range(4, nb):
        pred, var, chi = plateau_predict(bin_root[:k], value[:k], se[:k], bin_root[k])
        s = np.sqrt((se[k] ** 2 + var) * max(chi, 1.0))
        z[k] = (value[k] - pred) / s if s > 0 else 0.0
    rises = falls = None
    dep = np.nan
    for k in range(4, nb):
        nxt = z[k + 1] if k + 1 < nb else z[k]
        if rises is None and z[k] > DEPARTURE_Z and nxt > DEPARTURE_Z:
            rises = tm[edges[k]]
            if falls is None:
                dep = z[k]
        if falls is None and z[k] < -DEPARTURE_Z and nxt < -DEPARTURE_Z:
            falls = tm[edges[k]]
            if rises is None:
                dep = z[k]
    return dict(rises=rises, falls=falls, z=z, value=value, se=se, dep=dep)


def onset_covariance(tw, line, t0):
    """The sandwich covariance of (S, b, t0) over the window: the first 10 000 rows exactly,
    the rest in about 20 000 blocks each summarised by its middle row."""
    m = len(tw)
    s, c = line["slope"], line["c"]
    phi = line["phi"] if c > 0 else 0.0

    def rows(idx):
        r = 1 / np.sqrt(tw[idx] - t0)
        return np.column_stack([r, np.ones_like(r), 0.5 * s * r ** 3])

    k = min(m, 10_000)
    z = rows(np.arange(k))
    h = signal.lfilter([0.0, phi], [1.0, -phi], z, axis=0)
    jtj = z.T @ z
    ar = jtj + z.T @ h + h.T @ z
    if k < m:
        zk = rows(np.array([k]))[0]
        hk = phi * (h[-1] + z[-1])
        ar += (np.outer(hk, zk) + np.outer(zk, hk)) / (1 - phi)
        stride = max((m - k) // 20_000, 1)
        b0 = np.arange(k, m, stride)
        w = np.minimum(b0 + stride, m) - b0
        zb = rows(b0 + w // 2)
        g = (zb * w[:, None]).T @ zb
        jtj += g
        ar += (1 + phi) / (1 - phi) * g
    inv = np.linalg.inv(jtj)
    return inv @ (jtj * (1 - c) + ar * c) @ inv * line["sd"] ** 2


def range_switches(tw, yw, s, b, x):
    """Jumps of the residuals far above their neighbour-to-neighbour scatter that persist; blocks
    of 4 096 whose current steps cannot hold one are screened out, as ours does."""
    m = len(tw)
    if m < 20:
        return []

    def res(k):
        return yw[k] - s * x[k] - b

    idx = np.arange(1, m, max(m // 200_000, 1))
    d = np.abs(res(idx) - res(idx - 1))
    mid = len(d) // 2
    sigma = 1.4826 * np.partition(d, mid)[mid]
    if not sigma > 0:
        return []
    limit = 12 * sigma
    di = np.abs(np.diff(yw))  # di[k] = |I[k+1] − I[k]|

    def local(kk, f):
        js = [j for j in range(max(kk - 16, 1), min(kk + 17, m)) if j != kk]
        return f(np.array(js))

    def local_sigma(kk):
        return local(kk, lambda j: 1.4826 * np.partition(np.abs(res(j) - res(j - 1)), len(j) // 2)[len(j) // 2])

    def local_quantum(kk):
        def q(j):
            v = di[j - 1]
            v = v[v > 0]
            return v.min() if v.size else 0.0
        return local(kk, q)

    parts = CORES if m >= 200_000 else 1
    found = []
    for p in range(parts):
        lo, hi = max(m * p // parts, 5), min(m * (p + 1) // parts, m - 5)
        if hi <= lo:
            continue
        starts = np.arange(lo, hi, 4096)
        ends = np.minimum(starts + 4096, hi)
        screen = limit - np.abs(s * (x[starts - 1] - x[ends - 1]))
        peak = np.maximum.reduceat(di[lo - 1:hi - 1], starts - lo)
        # The samples of the blocks that can hold a jump, whose current step passes the screen;
        # their residual jumps in one go, then the few above the limit one by one.
        cand = [a0 + np.flatnonzero(di[a0 - 1:e0 - 1] > sc)
                for a0, e0, sc in zip(starts, ends, screen) if sc <= 0 or peak[(a0 - lo) // 4096] > sc]
        cand = np.concatenate(cand) if cand else np.zeros(0, dtype=np.int64)
        cand = cand[np.abs(res(cand) - res(cand - 1)) > limit]
        skip_to = -1
        for kk in cand:
            if kk < skip_to:
                continue
            jump = res(kk) - res(kk - 1)
            if abs(jump) > 12 * local_sigma(kk) and di[kk - 1] > 3 * local_quantum(kk):
                before = res(np.arange(kk - 5, kk)).mean()
                after = res(np.arange(kk, kk + 5)).mean()
                if abs(after - before) > 0.6 * abs(jump) and (after - before) * jump > 0:
                    found.append(tw[kk])
                    skip_to = kk + 5
    return found


def same_steps():
    tm, ym = t, i
    m = len(tm)
    # Provisional line where I·√t is flat (fallback: the middle of the log-time span).
    span = provisional_span(tm, ym)
    if span is None:
        lt0, lt1 = np.log(tm[0]), np.log(tm[-1])
        pa = int(np.searchsorted(tm, np.exp(lt0 + 0.25 * (lt1 - lt0))))
        pb = int(np.searchsorted(tm, np.exp(lt0 + 0.6 * (lt1 - lt0)), side="right"))
        if pb - pa < 10:
            pa, pb = m // 4, min(max(m * 3 // 4, m // 4 + 10), m)
    else:
        pa, pb = span
    prov = fit_line(tm[pa:pb], ym[pa:pb], 0.0)
    joint = estimate_charging(tm, ym, max(pa, 6), (pa, pb), prov["sd"])
    if joint is not None:
        t0_p = joint["t0"]
    else:
        t0_p = refine_onset(tm[pa:pb], ym[pa:pb], prov["slope"], prov["intercept"], 0.0) or 0.0
    t0_p = t0_p if t0_p < tm[0] else 0.0
    if t0_p != 0.0:
        prov = fit_line(tm[pa:pb], ym[pa:pb], t0_p)
    s_p, b_p = prov["slope"], prov["intercept"]
    # Lower bound: k·τ, the 0.1 % point and the noise floor of a resolved charging current,
    # and the leading points whose excess over the line is significant.
    cands = []
    if joint is not None:
        tau, amp, sig = joint["tau"], joint["amp"], joint["sd"]
        cands.append(K_TAU * tau)
        cands.append(optimize.brentq(lambda u: amp * np.exp(-u / tau) * np.sqrt(u) - FRACTION * s_p, 0.5 * tau, 1e6 * tau)
                     if amp * np.exp(-0.5) * np.sqrt(0.5 * tau) >= FRACTION * s_p else 0.5 * tau)
        if amp > 0.1 * sig > 0:
            cands.append(tau * np.log(amp / (0.1 * sig)))
    head = min(max(pa, 3), m)
    model = s_p / np.sqrt(tm[:head] - t0_p) + b_p
    sig_ex = ym[:head] - model > np.maximum(FRACTION * model, 3 * prov["sd"])
    # Ours stops at the third quiet point in a row; the excess ends at the last significant
    # point before that.
    quiet3 = np.flatnonzero(np.convolve(~sig_ex, np.ones(3, dtype=int), "valid") == 3)
    stop = quiet3[0] + 3 if quiet3.size else head
    hits = np.flatnonzero(sig_ex[:stop])
    excess = hits[-1] + 1 if hits.size else 0
    if 0 < excess < m:
        cands.append(tm[excess])
    lo_t = max(cands) if cands and max(cands) > tm[0] else tm[0]
    lo_index = int(np.searchsorted(tm, lo_t))
    # Without a resolved charging current, t0 again from the lower bound to the span's end.
    if joint is None and pb > lo_index + 10:
        t0r = refine_onset(tm[lo_index:pb], ym[lo_index:pb], prov["slope"], prov["intercept"], t0_p)
        if t0r is not None and t0r < tm[0]:
            line = fit_line(tm[pa:pb], ym[pa:pb], t0r)
            t0_p, s_p, b_p = t0r, line["slope"], line["intercept"]
    tail = (joint["amp"], joint["tau"]) if joint is not None else None
    stretch = min(m - lo_index, 50_000)
    tt = tm[lo_index:lo_index + stretch]
    resid = ym[lo_index:lo_index + stretch] - s_p / np.sqrt(tt - t0_p) - b_p
    if tail is not None:
        resid = resid - np.where(tt < 50 * tail[1], tail[0] * np.exp(-tt / tail[1]), 0.0)
    noise_sd, noise = from_variogram(resid, 100)
    plateau = plateau_check(tm, ym, lo_t, t0_p, noise_sd, noise, tail)
    # Upper bound: the first departure, or where the edge share reaches its limit.
    radius = np.sqrt(AREA / np.pi)
    t_edge = (EDGE_LIMIT * radius) ** 2 / (np.pi * d_from_slope(s_p))
    hi_t = min([tm[-1]] + [v for v in (plateau["rises"], plateau["falls"], t_edge) if v is not None])
    a = int(np.searchsorted(tm, lo_t))
    b = int(np.searchsorted(tm, hi_t, side="right"))
    tw, yw = tm[a:b], ym[a:b]
    # The fit: t0 refined over the window from the provisional line, then the line at that t0
    # and the covariance of (S, b, t0).
    t0 = refine_onset(tw, yw, prov["slope"], prov["intercept"], t0_p)
    line = fit_line(tw, yw, t0 if t0 is not None else 0.0)
    t0_se = np.nan
    inflation = 1.0
    if t0 is not None:
        cov3 = onset_covariance(tw, line, t0)
        t0_se = np.sqrt(cov3[2, 2])
        inflation = max(cov3[0, 0] / line["cov"][0, 0], 1.0)
    else:
        t0 = 0.0
    dof = line["dof"]
    tq = stats.t.ppf(0.975, max(dof, 1.0))
    s, s_se = line["slope"], np.sqrt(line["cov"][0, 0] * inflation)
    d = d_from_slope(s)
    ci = (d_from_slope(max(s - tq * s_se, 0.0)), d_from_slope(s + tq * s_se))
    # The uncertainty budget of D (slope, area, concentration) and the warnings' checks.
    contrib = np.abs([2 * d / s * s_se, -2 * d / AREA * U_AREA, -2 * d / CONC * U_CONC])
    uc = np.sqrt(np.sum(contrib ** 2))
    share = np.sqrt(np.pi * d * hi_t) / radius
    flags = dict(edge=hi_t >= t_edge * 0.999 or share >= EDGE_LIMIT * 0.999, few=b - a < 50,
                 structured=line["runs_z"] < -3 or line["lag1"] > 0.5, unusual=not 1e-7 <= d * 1e4 <= 1e-4)
    switches = range_switches(tw, yw, s, line["intercept"], line["x"])
    return dict(d=d, ci=ci, t0=t0, t0_se=t0_se, lo=lo_t, hi=hi_t, points=b - a, uc=uc, flags=flags,
                switches=switches, charging=joint, plateau=plateau, line=line, span=(pa, pb))


def best_of_3(f):
    best, out = 1e9, None
    for _ in range(3):
        start = time.perf_counter()
        out = f()
        best = min(best, time.perf_counter() - start)
    return best, out


tm_min, s_min = best_of_3(minimal)
tm_same, r = best_of_3(same_steps)
# Machine-readable for the bench: seconds, then D (cm²/s), its 95 % interval, t0 and its
# standard error (s), the window's bounds (s) and its points.
print("minimal", repr(tm_min), repr(float(d_from_slope(s_min) * 1e4)))
print("same", repr(tm_same), *(repr(float(v)) for v in (r["d"] * 1e4, r["ci"][0] * 1e4, r["ci"][1] * 1e4, r["t0"], r["t0_se"], r["lo"], r["hi"])), r["points"])
"##;

/// What a run found, in the units it is printed in.
struct Outcome {
    /// D in cm²/s.
    d_cm2_s: f64,
    /// Its 95 % interval in cm²/s.
    ci_cm2_s: [f64; 2],
    /// The refined onset and its standard error, s.
    t0_s: (f64, f64),
    /// The window's bounds, s.
    window_s: (f64, f64),
    /// Points in the window.
    points: usize,
}

impl Outcome {
    fn ours(r: &PlanarResult) -> Outcome {
        let d = r.diffusion_m2_s.map_or([f64::NAN; 3], |d| {
            [d.value * 1e4, d.ci95[0] * 1e4, d.ci95[1] * 1e4]
        });
        Outcome {
            d_cm2_s: d[0],
            ci_cm2_s: [d[1], d[2]],
            t0_s: (r.t0.value, r.t0.std_error),
            window_s: (r.window.lo.time_s, r.window.hi.time_s),
            points: r.window.points,
        }
    }

    /// From the same-steps peer's line after its time: D, the interval, t0 and its standard
    /// error, the bounds, the points.
    fn parse(fields: &[&str]) -> Option<Outcome> {
        let v: Vec<f64> = fields
            .iter()
            .map(|f| f.parse().ok())
            .collect::<Option<_>>()?;
        let [d, lo, hi, t0, t0_se, a, b, points] = v[..] else {
            return None;
        };
        Some(Outcome {
            d_cm2_s: d,
            ci_cm2_s: [lo, hi],
            t0_s: (t0, t0_se),
            window_s: (a, b),
            #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)] // A count, printed as an integer.
            points: points as usize,
        })
    }

    fn print(&self, who: &str) {
        println!(
            "{who}: D = {:.7e} cm²/s, 95 % [{:.7e}, {:.7e}]; t0 = {:.4e} s (se {:.2e} s); window {:.6e} to {:.6e} s, {} points",
            self.d_cm2_s,
            self.ci_cm2_s[0],
            self.ci_cm2_s[1],
            self.t0_s.0,
            self.t0_s.1,
            self.window_s.0,
            self.window_s.1,
            self.points
        );
    }
}

fn peer(current: &[f64], ours: &Outcome) {
    let stdout = match support::run_python_peer(PEER, &[current]) {
        Ok(stdout) => stdout,
        Err(why) => {
            println!("peer: {why}");
            return;
        }
    };
    for line in stdout.lines() {
        let fields: Vec<&str> = line.split_whitespace().collect();
        match fields.as_slice() {
            ["minimal", secs, d] => println!(
                "peer (minimal: provisional line, charging mask, final linregress), best of 3: {secs} s (D = {d} cm²/s)"
            ),
            ["same", secs, rest @ ..] => {
                println!("peer (same steps as ours), best of 3: {secs} s");
                match Outcome::parse(rest) {
                    Some(p) => {
                        p.print("peer (same steps as ours)");
                        println!(
                            "ours against the peer: D {:+.2e} relative, interval half-width ×{:.5}, t0 {:+.2e} s, bounds {:+.2e} s and {:+.2e} s, points {:+}",
                            (ours.d_cm2_s - p.d_cm2_s) / p.d_cm2_s,
                            (ours.ci_cm2_s[1] - ours.ci_cm2_s[0]) / (p.ci_cm2_s[1] - p.ci_cm2_s[0]),
                            ours.t0_s.0 - p.t0_s.0,
                            ours.window_s.0 - p.window_s.0,
                            ours.window_s.1 - p.window_s.1,
                            i128::try_from(ours.points).unwrap_or(i128::MAX)
                                - i128::try_from(p.points).unwrap_or(i128::MAX)
                        );
                    }
                    None => println!("peer (same steps as ours): unreadable results: {line}"),
                }
            }
            _ => println!("peer: {line}"),
        }
    }
}

fn main() {
    let (time, current) = transient();
    let cell = Cell {
        area_m2: Some(Measured::new(7.07e-6, 7e-8)),
        conc_mol_m3: Some(Measured::new(1.0, 0.005)),
        ..Cell::default()
    };
    // The edge-share limit is lifted so that the window spans all 10 M points.
    let mut options = PlanarOptions {
        sensitivity: false,
        ..PlanarOptions::default()
    };
    options.window.edge_share_limit = 1.0;
    let check = analyze_data(&time, &current, &cell, &options, "none".into(), Vec::new())
        .expect("analysis");
    let ours = Outcome::ours(&check);
    ours.print("check (ours)");
    peer(&current, &ours);
    let mut c = Criterion::default()
        .sample_size(10)
        .measurement_time(Duration::from_secs(10))
        .configure_from_args();
    c.bench_function("automatic windows + planar fit, 10M points", |b| {
        b.iter(|| {
            analyze_data(&time, &current, &cell, &options, "none".into(), Vec::new())
                .expect("analysis")
        });
    });
    c.final_summary();
}
