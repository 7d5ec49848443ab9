//! Automatic windows plus the planar Cottrell fit on a 10-million-point transient, with the peer
//! a user would otherwise reach for — the same steps in numpy with `scipy.stats.linregress` —
//! timed on the same data in the same run.
//!
//! Run with `cargo bench -p diffusor-fit --bench planar`.

use std::process::Command;
use std::time::Duration;

use criterion::Criterion;
use diffusor_fit::cell::{Cell, Measured};
use diffusor_fit::models::planar::cottrell_current_a;
use diffusor_fit::planar::{PlanarOptions, analyze_data};

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

const PEER: &str = r#"
import sys, time
import numpy as np
from scipy import stats
n, dt = 10_000_000, 1e-5
t = np.arange(1, n + 1) * dt
rng = np.random.default_rng(1)
F = 96485.33212
S = F * 7.07e-6 * 1.0 * np.sqrt(7e-10 / np.pi)
i = S / np.sqrt(t) + rng.uniform(-8.5e-9, 8.5e-9, n)
def steps():
    x = 1.0 / np.sqrt(t)
    # provisional line over the middle of the log-time span
    lt = np.log(t)
    a, b = np.searchsorted(lt, lt[0] + 0.25 * (lt[-1] - lt[0])), np.searchsorted(lt, lt[0] + 0.6 * (lt[-1] - lt[0]))
    p = stats.linregress(x[a:b], i[a:b])
    r = i - p.intercept - p.slope * x
    sd = r[a:b].std()
    # leading points with a significant excess (charging)
    sig = r[:a] > np.maximum(1e-3 * (p.slope * x[:a] + p.intercept), 3 * sd)
    lo = int(np.argmin(sig)) if sig.any() else 0
    # I*sqrt(t) in log bins (10 per decade), plateau compared bin by bin
    y = i * np.sqrt(t)
    edges = np.searchsorted(t, t[lo] * 10 ** (np.arange(0, 8, 0.1)))
    edges = np.unique(edges[edges < n])
    sums = np.add.reduceat(y[lo:], edges - lo)
    counts = np.diff(np.append(edges, n))
    means = sums / counts
    z = (means[4:] - means[:4].mean()) / (sd * np.sqrt(t[edges[4:]]) / np.sqrt(counts[4:]))
    hi = n
    # final fit over the window
    q = stats.linregress(x[lo:hi], i[lo:hi])
    return q.slope
best = 1e9
for _ in range(3):
    t0 = time.perf_counter(); steps(); best = min(best, time.perf_counter() - t0)
print(best)
"#;

fn peer() {
    match Command::new("python3").arg("-c").arg(PEER).output() {
        Ok(out) if out.status.success() => println!(
            "peer: numpy + scipy.stats.linregress, same steps, best of 3: {} s",
            String::from_utf8_lossy(&out.stdout).trim()
        ),
        Ok(out) => println!(
            "peer: not measured ({}); `pip install numpy scipy` to measure it",
            String::from_utf8_lossy(&out.stderr)
                .lines()
                .last()
                .unwrap_or("")
        ),
        Err(e) => println!("peer: python3 not available ({e})"),
    }
}

fn main() {
    let (time, current) = transient();
    let cell = Cell {
        area_m2: Some(Measured::new(7.07e-6, 7e-8)),
        conc_mol_m3: Some(Measured::new(1.0, 0.005)),
        ..Cell::default()
    };
    // The edge-share limit is lifted so that the window spans all 10 M points, as the peer's does.
    let mut options = PlanarOptions {
        sensitivity: false,
        ..PlanarOptions::default()
    };
    options.window.edge_share_limit = 1.0;
    let check = analyze_data(&time, &current, &cell, &options, "none".into(), Vec::new())
        .expect("analysis");
    println!(
        "check: D = {:.5e} cm²/s over {} points ({} to {} s)",
        check.diffusion_m2_s.map_or(f64::NAN, |d| d.value * 1e4),
        check.window.points,
        check.window.lo.time_s,
        check.window.hi.time_s
    );
    peer();
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
