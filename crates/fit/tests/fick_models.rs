//! Independent numerical checks of two model currents: Fick's second law solved by finite
//! differences in this file and compared with
//! - `diffusor_fit::models::kinetics::kinetic_current_a`, the planar electrode with a finite
//!   first-order rate at the surface (boundary `D·∂C/∂x|₀ = kf·C(0, t)`), and
//! - `diffusor_fit::models::sphere::sphere_current_a`, the sphere at the diffusion limit.
//!
//! The method is that of `tests/fick_planar.rs` (see there for the references): variable-step
//! BDF2 started by one backward-Euler step (C. W. Gear 1971; E. Hairer & G. Wanner 1996), an
//! exponentially expanding space grid and exponentially expanding time steps (D. Britz &
//! J. Strutwolf, *Digital Simulation in Electrochemistry*, 4th ed., Springer 2016), the Thomas
//! algorithm for each tridiagonal solve, and the three-point one-sided surface gradient.
//!
//! - The kinetic boundary `D·∂C/∂x = kf·C` at `x = 0` is taken in by a half control volume at
//!   the surface node: `(h₁/2)·dC₀/dt = D·(C₁ − C₀)/h₁ − kf·C₀`, which on a uniform grid is the
//!   same as a central difference with a ghost node (Britz & Strutwolf 2016 on boundary
//!   conditions with a flux; as remembered). The current is then `n·F·A·kf·C₀` exactly.
//! - For the sphere, Fick's law in spherical symmetry `∂C/∂t = D·(∂²C/∂r² + (2/r)·∂C/∂r)`
//!   becomes the planar equation `∂u/∂t = D·∂²u/∂r²` for `u = r·C` (J. Crank, *The Mathematics
//!   of Diffusion*, 2nd ed., Oxford 1975, ch. 6), with `u(r₀) = 0` (diffusion limit) and
//!   `u = r·C*` far away; the current is `n·F·4πr₀²·D·∂C/∂r|r₀ = n·F·4πr₀·D·∂u/∂r|r₀` since
//!   `C(r₀) = 0`.
//!
//! Run with `--nocapture` to see the errors.

use diffusor_fit::constants::{CM2_PER_S, FARADAY_C_PER_MOL};
use diffusor_fit::models::kinetics::{BackReaction, kinetic_current_a};
use diffusor_fit::models::sphere::{SphereKind, sphere_current_a};

const N_ELECTRONS: f64 = 1.0;
const CONC_MOL_M3: f64 = 1.0;
const D_M2_S: f64 = 7.2e-6 * CM2_PER_S;
const T_FIRST_S: f64 = 1e-3;
const T_MAX_S: f64 = 10.0;
const SPACE_STRETCH: f64 = 10.0;
const TIME_STRETCH: f64 = 12.0;

fn expanding_grid(span: f64, stretch: f64, intervals: usize) -> Vec<f64> {
    let denominator = stretch.exp_m1();
    (0..=intervals)
        .map(|k| span * (stretch * k as f64 / intervals as f64).exp_m1() / denominator)
        .collect()
}

fn thomas(a: &[f64], b: &[f64], c: &[f64], r: &mut [f64], scratch: &mut [f64]) {
    let m = r.len();
    scratch[0] = c[0] / b[0];
    r[0] /= b[0];
    for i in 1..m {
        let denominator = b[i] - a[i] * scratch[i - 1];
        scratch[i] = c[i] / denominator;
        r[i] = (r[i] - a[i] * r[i - 1]) / denominator;
    }
    for i in (0..m - 1).rev() {
        r[i] -= scratch[i] * r[i + 1];
    }
}

fn surface_gradient(x: &[f64], c: &[f64]) -> f64 {
    let h1 = x[1] - x[0];
    let h2 = x[2] - x[1];
    -(2.0 * h1 + h2) / (h1 * (h1 + h2)) * c[0] + (h1 + h2) / (h1 * h2) * c[1]
        - h1 / (h2 * (h1 + h2)) * c[2]
}

/// The surface condition at `x = 0`.
#[derive(Clone, Copy)]
enum Surface {
    /// `u(0) = value`.
    Fixed(f64),
    /// `D·∂u/∂x = kf·u` at `x = 0`.
    Rate(f64),
}

/// Solves `∂u/∂t = D·∂²u/∂x²` on `[0, L]` with the surface condition at 0, `u(L) = far`, and
/// the initial profile `initial(x)`; returns `(t, u₀, ∂u/∂x|₀)` at every time node.
fn simulate(
    length_m: f64,
    surface: Surface,
    far: f64,
    initial: impl Fn(f64) -> f64,
    space_intervals: usize,
    time_steps: usize,
) -> (Vec<f64>, Vec<(f64, f64, f64)>) {
    let x = expanding_grid(length_m, SPACE_STRETCH, space_intervals);
    let times = expanding_grid(T_MAX_S, TIME_STRETCH, time_steps);
    // Unknown nodes: 0..N−1 with a rate condition, 1..N−1 with a fixed surface.
    let first = match surface {
        Surface::Fixed(_) => 1,
        Surface::Rate(_) => 0,
    };
    let unknowns = space_intervals - first;
    // Operator rows: L·u at node i = lower·u[i−1] − (lower + upper + sink)·u[i] + upper·u[i+1].
    let mut lower = vec![0.0; space_intervals];
    let mut upper = vec![0.0; space_intervals];
    let mut sink = vec![0.0; space_intervals];
    for i in 1..space_intervals {
        let hm = x[i] - x[i - 1];
        let hp = x[i + 1] - x[i];
        lower[i] = 2.0 / (hm * (hm + hp));
        upper[i] = 2.0 / (hp * (hm + hp));
    }
    if let Surface::Rate(kf) = surface {
        // Half control volume of width h₁/2: du₀/dt = (2D/h₁²)(u₁ − u₀) − (2kf/h₁)·u₀.
        let h1 = x[1] - x[0];
        upper[0] = 2.0 / (h1 * h1);
        sink[0] = 2.0 * kf / (h1 * D_M2_S);
    }
    let mut u: Vec<f64> = x.iter().map(|&x| initial(x)).collect();
    if let Surface::Fixed(v) = surface {
        u[0] = v;
    }
    u[space_intervals] = far;
    let mut a = vec![0.0; unknowns];
    let mut b = vec![0.0; unknowns];
    let mut c = vec![0.0; unknowns];
    let mut rhs = vec![0.0; unknowns];
    let mut scratch = vec![0.0; unknowns];
    let mut solve = |tau: f64, source: &[f64], u: &mut Vec<f64>| {
        for j in 0..unknowns {
            let i = j + first;
            let lo = D_M2_S * tau * lower[i];
            let up = D_M2_S * tau * upper[i];
            let si = D_M2_S * tau * sink[i];
            a[j] = -lo;
            b[j] = 1.0 + lo + up + si;
            c[j] = -up;
            rhs[j] = source[i];
        }
        if first == 1 {
            rhs[0] -= a[0] * u[0];
        }
        rhs[unknowns - 1] -= c[unknowns - 1] * u[space_intervals];
        thomas(&a, &b, &c, &mut rhs, &mut scratch);
        u[first..space_intervals].copy_from_slice(&rhs);
    };
    let mut out = Vec::with_capacity(time_steps);
    let mut older = u.clone();
    let mut source = u.clone();
    for k in 1..=time_steps {
        let dt = times[k] - times[k - 1];
        if k == 1 {
            older.copy_from_slice(&u);
            source.copy_from_slice(&u);
            solve(dt, &source, &mut u);
        } else {
            let omega = dt / (times[k - 1] - times[k - 2]);
            let alpha0 = (1.0 + 2.0 * omega) / (1.0 + omega);
            for i in 0..=space_intervals {
                source[i] =
                    ((1.0 + omega) * u[i] - omega * omega / (1.0 + omega) * older[i]) / alpha0;
            }
            older.copy_from_slice(&u);
            solve(dt / alpha0, &source, &mut u);
        }
        out.push((times[k], u[0], surface_gradient(&x, &u)));
    }
    (x, out)
}

/// Largest relative deviation over the comparison window.
fn worst(points: &[(f64, f64)], exact: impl Fn(f64) -> f64) -> f64 {
    let inside: Vec<_> = points
        .iter()
        .filter(|(t, _)| (T_FIRST_S..=T_MAX_S).contains(t))
        .collect();
    assert!(
        inside.len() >= 50,
        "only {} nodes in the window",
        inside.len()
    );
    inside
        .iter()
        .map(|&&(t, i)| (i / exact(t) - 1.0).abs())
        .fold(0.0, f64::max)
}

#[test]
fn finite_differences_reproduce_the_kinetic_current() {
    // kf = 1e-4 m/s (1e-2 cm/s): H = kf/√D = 3.7 s^-½, so H√t runs from 0.12 to 12 over the
    // window and the transient changes from kinetic to diffusion control inside it.
    let area_m2 = 7.07e-6;
    let kf = 1e-4;
    let length = 6.0 * (D_M2_S * T_MAX_S).sqrt();
    let mut errors = Vec::new();
    for level in 0..3 {
        let (_, sim) = simulate(
            length,
            Surface::Rate(kf),
            CONC_MOL_M3,
            |_| CONC_MOL_M3,
            100 << level,
            200 << level,
        );
        let current: Vec<(f64, f64)> = sim
            .iter()
            .map(|&(t, c0, _)| (t, N_ELECTRONS * FARADAY_C_PER_MOL * area_m2 * kf * c0))
            .collect();
        let e = worst(&current, |t| {
            kinetic_current_a(
                N_ELECTRONS,
                area_m2,
                CONC_MOL_M3,
                kf,
                D_M2_S,
                BackReaction::Irreversible,
                t,
            )
        });
        println!("kinetic: level {level}: max |I_FD/I − 1| = {e:.3e}");
        errors.push(e);
    }
    // Project requirement: within 0.5 %; and the error must fall as the grids are refined.
    assert!(errors.iter().all(|e| *e < 5e-3), "{errors:?}");
    assert!(
        errors.windows(2).all(|p| p[1] < p[0] / 2.0),
        "no convergence: {errors:?}"
    );
}

#[test]
fn finite_differences_reproduce_the_sphere_current() {
    // r₀ = 10 µm: the diffusion layer √(πDt) grows from 0.15 r₀ to 15 r₀ over the window, so
    // the current moves from Cottrell-like to near steady state.
    let r0 = 10e-6;
    let length = 6.0 * (D_M2_S * T_MAX_S).sqrt();
    let mut errors = Vec::new();
    for level in 0..3 {
        let (_, sim) = simulate(
            length,
            Surface::Fixed(0.0),
            (r0 + length) * CONC_MOL_M3,
            |x| (r0 + x) * CONC_MOL_M3,
            100 << level,
            200 << level,
        );
        let current: Vec<(f64, f64)> = sim
            .iter()
            .map(|&(t, _, du)| {
                (
                    t,
                    N_ELECTRONS * FARADAY_C_PER_MOL * 4.0 * std::f64::consts::PI * r0 * D_M2_S * du,
                )
            })
            .collect();
        let e = worst(&current, |t| {
            sphere_current_a(N_ELECTRONS, SphereKind::Sphere, r0, CONC_MOL_M3, D_M2_S, t)
        });
        println!("sphere: level {level}: max |I_FD/I − 1| = {e:.3e}");
        errors.push(e);
    }
    assert!(errors.iter().all(|e| *e < 5e-3), "{errors:?}");
    assert!(
        errors.windows(2).all(|p| p[1] < p[0] / 2.0),
        "no convergence: {errors:?}"
    );
}
