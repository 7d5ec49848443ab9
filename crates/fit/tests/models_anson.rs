//! Chronocoulometry (F. C. Anson, Anal. Chem. 36 (1964) 932): the charge integral of the
//! Cottrell current, and the recovery of D and the adsorbed amount Γ from noisy transients.

use diffusor_fit::cell::Measured;
use diffusor_fit::constants::{CM2_PER_S, FARADAY_C_PER_MOL};
use diffusor_fit::models::anson::{
    DoubleLayerCharge, double_layer_from_blank, fit_anson, fit_anson_from_current,
    integrate_charge_c,
};
use diffusor_fit::models::common::Transient;
use diffusor_fit::models::planar::{cottrell_current_a, cottrell_slope};
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

const AREA_M2: f64 = 7.07e-6;
const C: f64 = 1.0;
const D_M2_S: f64 = 7.2e-6 * CM2_PER_S;
/// Γ = 1e-10 mol/cm² = 1e-6 mol/m², a monolayer-scale coverage.
const GAMMA_MOL_M2: f64 = 1e-6;
/// 20 µC/cm² × 0.0707 cm², a double-layer charge of the usual size (common practice, no source).
const Q_DL_C: f64 = 1.414e-6;

#[test]
fn integrated_cottrell_current_is_twice_the_slope_times_root_t() {
    // ∫₀ᵗ S·τ^-½ dτ = 2S√t: the Cottrell current's integral, Anson's first term, with
    // S = n·F·A·C·√(D/π). The √t trapezoid rule is exact for it, so only rounding remains.
    let t: Vec<f64> = (1..=1000).map(|k| 1e-3 * k as f64).collect();
    let i: Vec<f64> = t
        .iter()
        .map(|&t| cottrell_current_a(1.0, AREA_M2, C, D_M2_S, t))
        .collect();
    let q = integrate_charge_c(&Transient {
        time_s: &t,
        current_a: &i,
    });
    let s = cottrell_slope(1.0, AREA_M2, C, D_M2_S);
    for (t, q) in t.iter().zip(&q) {
        assert!((q / (2.0 * s * t.sqrt()) - 1.0).abs() < 1e-12);
    }
}

/// A current transient with white noise and a charging spike that carries the double-layer
/// and adsorbed charge, `(Q/τc)·exp(−t/τc)` with τc = 0.1 ms, sampled log-uniformly from
/// 0.1 µs so that the spike is resolved (the integration credits the time before the first
/// sample with the Cottrell value `2·I₀·t₀`, here 0.1 % of the spike's charge too much).
fn noisy_current(seed: u64, sigma_a: f64) -> (Vec<f64>, Vec<f64>) {
    let mut rng = StdRng::seed_from_u64(seed);
    let noise = Normal::new(0.0, sigma_a).expect("normal");
    let q_spike = Q_DL_C + FARADAY_C_PER_MOL * AREA_M2 * GAMMA_MOL_M2;
    let tau_c = 1e-4;
    let m = 4000;
    let t: Vec<f64> = (0..m)
        .map(|k| 1e-7 * 1e7f64.powf(k as f64 / (m - 1) as f64))
        .collect();
    let i: Vec<f64> = t
        .iter()
        .map(|&t| {
            cottrell_current_a(1.0, AREA_M2, C, D_M2_S, t)
                + q_spike / tau_c * (-t / tau_c).exp()
                + noise.sample(&mut rng)
        })
        .collect();
    (t, i)
}

#[test]
fn recovers_d_and_gamma_from_an_integrated_current() {
    // Project requirement: true values within 2 % and inside the 95 % intervals, as coverage
    // over 40 seeds (at least 34). Noise: 20 nA white on a current of 3–30 µA in the window,
    // integrated, so the charge errors are a random walk.
    let dl = DoubleLayerCharge {
        charge_c: Measured::new(Q_DL_C, 0.01 * Q_DL_C),
    };
    let (mut d_in, mut g_in) = (0, 0);
    for seed in 0..40 {
        let (t, i) = noisy_current(seed, 2e-8);
        let fit = fit_anson_from_current(
            &Transient {
                time_s: &t,
                current_a: &i,
            },
            Some([0.05, 1.0]),
            1.0,
            AREA_M2,
            C,
            Some(dl),
        )
        .unwrap();
        let d = fit.fit.diffusion_m2_s.unwrap();
        let g = fit.adsorbed_mol_m2.unwrap();
        if seed == 0 {
            println!(
                "D = {:.5e} ± {:.1e}, Γ = {:.4e} ± {:.1e}, noise {:?}",
                d.value, d.std_error, g.value, g.std_error, fit.fit.noise
            );
        }
        assert!((d.value / D_M2_S - 1.0).abs() < 0.02, "seed {seed}: {d:?}");
        assert!(
            (g.value / GAMMA_MOL_M2 - 1.0).abs() < 0.02,
            "seed {seed}: {g:?}"
        );
        d_in += usize::from(d.ci95[0] < D_M2_S && D_M2_S < d.ci95[1]);
        g_in += usize::from(g.ci95[0] < GAMMA_MOL_M2 && GAMMA_MOL_M2 < g.ci95[1]);
    }
    println!("coverage: D {d_in}/40, Γ {g_in}/40");
    assert!(
        d_in >= 34 && g_in >= 34,
        "coverage D {d_in}/40, Γ {g_in}/40"
    );
}

#[test]
fn a_measured_charge_column_with_white_noise() {
    // A coulometer's charge: white noise of 2 nC on the charge itself, where the AR(1)
    // sandwich of `fit_anson` applies. Coverage over 40 seeds, at least 34.
    let offset = Q_DL_C + FARADAY_C_PER_MOL * AREA_M2 * GAMMA_MOL_M2;
    let s = cottrell_slope(1.0, AREA_M2, C, D_M2_S);
    let mut d_in = 0;
    for seed in 0..40 {
        let mut rng = StdRng::seed_from_u64(100 + seed);
        let noise = Normal::new(0.0, 2e-9).expect("normal");
        let t: Vec<f64> = (1..=1000).map(|k| 1e-3 * k as f64).collect();
        let q: Vec<f64> = t
            .iter()
            .map(|t| 2.0 * s * t.sqrt() + offset + noise.sample(&mut rng))
            .collect();
        let fit = fit_anson(&t, &q, None, 1.0, AREA_M2, C, None).unwrap();
        let d = fit.fit.diffusion_m2_s.unwrap();
        assert!((d.value / D_M2_S - 1.0).abs() < 0.02);
        assert!((fit.intercept_c.value / offset - 1.0).abs() < 0.02);
        d_in += usize::from(d.ci95[0] < D_M2_S && D_M2_S < d.ci95[1]);
    }
    println!("charge column coverage: D {d_in}/40");
    assert!(d_in >= 34, "coverage {d_in}/40");
}

#[test]
fn a_blank_gives_the_double_layer_charge() {
    // A blank: only the double-layer charge, with white charge noise of 1 nC.
    let mut rng = StdRng::seed_from_u64(9);
    let noise = Normal::new(0.0, 1e-9).expect("normal");
    let t: Vec<f64> = (1..=500).map(|k| 2e-3 * k as f64).collect();
    let q: Vec<f64> = t.iter().map(|_| Q_DL_C + noise.sample(&mut rng)).collect();
    let dl = double_layer_from_blank(&t, &q, None).unwrap();
    println!("Q_dl = {:.5e} ± {:.1e} C", dl.charge_c.value, dl.charge_c.u);
    assert!((dl.charge_c.value - Q_DL_C).abs() < 3.0 * dl.charge_c.u);
    assert!((dl.charge_c.value / Q_DL_C - 1.0).abs() < 0.02);
}

#[test]
fn a_negative_slope_is_refused() {
    let t: Vec<f64> = (1..=10).map(f64::from).collect();
    let q: Vec<f64> = t.iter().map(|t| -t.sqrt()).collect();
    let err = fit_anson(&t, &q, None, 1.0, AREA_M2, C, None).unwrap_err();
    assert!(
        err.to_string()
            .starts_with("the Anson plot's slope is -1.000e0 C/s^½"),
        "{err}"
    );
}
