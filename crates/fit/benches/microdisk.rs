//! The microdisk fit (Shoup–Szabo form) on 10⁵ points, with `scipy.optimize.curve_fit` on the
//! same model and data, measured in the same run.
//!
//! Starting values: ours are found automatically (a log grid of D with its least-squares n·C,
//! then Levenberg–Marquardt); scipy is given D and n·C 20 % off the truth, which is the easier
//! task. Run with `cargo bench -p diffusor-fit --bench microdisk`.

use std::process::Command;
use std::time::Duration;

use criterion::Criterion;
use diffusor_fit::models::common::{Known, Transient};
use diffusor_fit::models::microdisk::{DiskExpression, fit_microdisk, microdisk_current_a};

const N: usize = 100_000;
const R: f64 = 5e-6;
const D: f64 = 7.8e-10;

fn data() -> (Vec<f64>, Vec<f64>) {
    // 0.1 ms sampling for 10 s, 2 pA of deterministic pseudo-random noise.
    let time: Vec<f64> = (1..=N).map(|k| k as f64 * 1e-4).collect();
    let mut state: u64 = 0x9e37_79b9_7f4a_7c15;
    let current = time
        .iter()
        .map(|&t| {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let u = (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
            microdisk_current_a(1.0, R, 1.0, D, t, DiskExpression::ShoupSzabo) + 7e-12 * u
        })
        .collect();
    (time, current)
}

const PEER: &str = r#"
import time
import numpy as np
from scipy.optimize import curve_fit
F = 96485.33212
r = 5e-6
t = np.arange(1, 100_001) * 1e-4
def model(t, d, nc):
    tau = 4 * d * t / r**2
    x = tau ** -0.5
    return 4 * F * d * nc * r * (0.7854 + 0.8862 * x + 0.2146 * np.exp(-0.7823 * x))
rng = np.random.default_rng(1)
y = model(t, 7.8e-10, 1.0) + rng.uniform(-3.5e-12, 3.5e-12, t.size)
best = 1e9
for _ in range(5):
    t0 = time.perf_counter()
    p, _ = curve_fit(model, t, y, p0=[7.8e-10 * 1.2, 0.8])
    best = min(best, time.perf_counter() - t0)
print(best, p[0])
"#;

fn main() {
    let (time, current) = data();
    let transient = Transient {
        time_s: &time,
        current_a: &current,
    };
    let check = fit_microdisk(
        &transient,
        R,
        Known::Electrons(1.0),
        DiskExpression::ShoupSzabo,
    )
    .expect("fit");
    println!(
        "check: D = {:.5e} cm²/s (true {:.5e})",
        check.fit.diffusion_m2_s.map_or(f64::NAN, |d| d.value * 1e4),
        D * 1e4
    );
    match Command::new("python3").arg("-c").arg(PEER).output() {
        Ok(out) if out.status.success() => {
            let text = String::from_utf8_lossy(&out.stdout);
            let mut it = text.split_whitespace();
            println!(
                "peer: scipy.optimize.curve_fit, best of 5: {} s (D = {} m²/s)",
                it.next().unwrap_or("?"),
                it.next().unwrap_or("?")
            );
        }
        Ok(out) => println!(
            "peer: not measured ({}); `pip install numpy scipy` to measure it",
            String::from_utf8_lossy(&out.stderr)
                .lines()
                .last()
                .unwrap_or("")
        ),
        Err(e) => println!("peer: python3 not available ({e})"),
    }
    let mut c = Criterion::default()
        .sample_size(20)
        .measurement_time(Duration::from_secs(8))
        .configure_from_args();
    c.bench_function("microdisk fit, 1e5 points", |b| {
        b.iter(|| {
            fit_microdisk(
                &transient,
                R,
                Known::Electrons(1.0),
                DiskExpression::ShoupSzabo,
            )
            .expect("fit")
        });
    });
    c.final_summary();
}
