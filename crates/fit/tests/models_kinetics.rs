//! The finite-kinetics current at a planar electrode: its published limits and the recovery of
//! kf and D from noisy synthetic transients.

use diffusor_fit::constants::{CM2_PER_S, FARADAY_C_PER_MOL};
use diffusor_fit::models::common::{ModelError, ModelWarningCode, Transient};
use diffusor_fit::models::kinetics::{BackReaction, KineticCell, fit_kinetics, kinetic_current_a};
use diffusor_fit::models::planar::cottrell_current_a;
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

const N: f64 = 1.0;
/// A 3 mm disk, 0.0707 cm².
const AREA_M2: f64 = 7.07e-6;
const CONC_MOL_M3: f64 = 1.0;
const D_M2_S: f64 = 7.2e-6 * CM2_PER_S;

#[test]
fn long_times_tend_to_cottrell_with_the_first_correction() {
    // For H√t ≫ 1, I = Cottrell·(1 − 1/(2H²t) + O((H²t)^-2)) (erfcx asymptotics, Abramowitz &
    // Stegun 1964, eq. 7.1.23, in the kinetic current of Bard & Faulkner 2001). The next
    // term is 3/(4x⁴), so the relative difference must fall below 1/x⁴.
    let kf = 1e-4;
    let h = kf / D_M2_S.sqrt();
    for &x in &[10.0, 30.0, 100.0, 1e3] {
        let t = (x / h).powi(2);
        let i = kinetic_current_a(
            N,
            AREA_M2,
            CONC_MOL_M3,
            kf,
            D_M2_S,
            BackReaction::Irreversible,
            t,
        );
        let limit =
            cottrell_current_a(N, AREA_M2, CONC_MOL_M3, D_M2_S, t) * (1.0 - 1.0 / (2.0 * x * x));
        let rel = (i / limit - 1.0).abs();
        assert!(
            rel < 1.0 / x.powi(4),
            "H√t = {x}: relative difference {rel:e}"
        );
    }
}

#[test]
fn short_times_tend_to_the_kinetic_current() {
    // For H√t ≪ 1, I = n·F·A·kf·C·(1 − 2H√t/√π + O(H²t)) (A&S 1964, same source).
    let kf = 1e-4;
    let h = kf / D_M2_S.sqrt();
    for &x in &[1e-4, 1e-3, 1e-2] {
        let t = (x / h).powi(2);
        let i = kinetic_current_a(
            N,
            AREA_M2,
            CONC_MOL_M3,
            kf,
            D_M2_S,
            BackReaction::Irreversible,
            t,
        );
        let limit = N
            * FARADAY_C_PER_MOL
            * AREA_M2
            * kf
            * CONC_MOL_M3
            * (1.0 - 2.0 * x / std::f64::consts::PI.sqrt());
        let rel = (i / limit - 1.0).abs();
        assert!(rel < 1.01 * x * x, "H√t = {x}: relative difference {rel:e}");
    }
}

#[test]
fn quasi_reversible_long_time_current_is_cottrell_over_q() {
    // With kb = θ·kf and D_R = D_O, H = (kf + kb)/√D, and for H√t ≫ 1 the current tends to
    // n·F·A·kf·C/(H√(πt)) = Cottrell·kf/(kf + kb) (Bard & Faulkner 2001, the large-H√t
    // limit): the surface concentration settles at the Nernstian ratio.
    let kf = 1e-3;
    let back = BackReaction::QuasiReversible {
        kb_over_kf: 0.5,
        dr_over_do: 1.0,
    };
    let t = 10.0;
    let i = kinetic_current_a(N, AREA_M2, CONC_MOL_M3, kf, D_M2_S, back, t);
    let expected = cottrell_current_a(N, AREA_M2, CONC_MOL_M3, D_M2_S, t) / 1.5;
    let x = 1.5 * kf * (t / D_M2_S).sqrt();
    assert!(x > 100.0);
    assert!(
        (i / expected - 1.0).abs() < 1.0 / (x * x),
        "{i:e} vs {expected:e}"
    );
}

/// A noisy transient sampled log-uniformly from `t_lo` to `t_hi`.
fn synthetic(
    kf: f64,
    back: BackReaction,
    t_lo: f64,
    t_hi: f64,
    noise_rel: f64,
    seed: u64,
) -> (Vec<f64>, Vec<f64>) {
    let m = 400;
    let mut rng = StdRng::seed_from_u64(seed);
    let t: Vec<f64> = (0..m)
        .map(|k| t_lo * (t_hi / t_lo).powf(k as f64 / (m - 1) as f64))
        .collect();
    let scale = kinetic_current_a(N, AREA_M2, CONC_MOL_M3, kf, D_M2_S, back, t_hi);
    let noise = Normal::new(0.0, noise_rel * scale).expect("normal");
    let i = t
        .iter()
        .map(|&t| {
            kinetic_current_a(N, AREA_M2, CONC_MOL_M3, kf, D_M2_S, back, t) + noise.sample(&mut rng)
        })
        .collect();
    (t, i)
}

#[test]
fn recovers_kf_and_d_from_noisy_transients_with_calibrated_intervals() {
    // Synthetic data from the model itself with 1 % (of the last current) Gaussian noise,
    // 80 seeds. Project requirement: true values within 2 % and inside the 95 % intervals. A
    // 95 % interval misses 5 % of the time by construction (seed 1 alone puts D 2.2 standard
    // errors low), so the interval requirement is checked as coverage: at least 70 of 80
    // (76 expected; 70 is three binomial standard deviations below).
    let kf = 1e-4; // 1e-2 cm/s, H = 3.7 s^-½: H√t runs from 0.12 to 12 over 1 ms–10 s.
    let cell = KineticCell {
        n: N,
        area_m2: AREA_M2,
        conc_mol_m3: CONC_MOL_M3,
        back: BackReaction::Irreversible,
    };
    let (mut kf_in, mut d_in) = (0, 0);
    let mut z_sum = 0.0;
    for seed in 0..80 {
        let (t, i) = synthetic(kf, BackReaction::Irreversible, 1e-3, 10.0, 0.01, seed);
        let fit = fit_kinetics(
            &Transient {
                time_s: &t,
                current_a: &i,
            },
            &cell,
        )
        .unwrap();
        let kf_hat = fit.fit.params[0].estimate;
        let d_hat = fit.fit.diffusion_m2_s.unwrap();
        if seed < 3 {
            println!(
                "seed {seed}: kf = {:.5e} ± {:.2e}, D = {:.5e} ± {:.2e}, {} iterations",
                kf_hat.value, kf_hat.std_error, d_hat.value, d_hat.std_error, fit.fit.iterations
            );
        }
        z_sum += (d_hat.value - D_M2_S) / d_hat.std_error;
        kf_in += usize::from(kf_hat.ci95[0] < kf && kf < kf_hat.ci95[1]);
        d_in += usize::from(d_hat.ci95[0] < D_M2_S && D_M2_S < d_hat.ci95[1]);
        assert!(
            (kf_hat.value / kf - 1.0).abs() < 0.02,
            "seed {seed}: {kf_hat:?}"
        );
        assert!(
            (d_hat.value / D_M2_S - 1.0).abs() < 0.02,
            "seed {seed}: {d_hat:?}"
        );
        assert!(fit.fit.in_validity_range && fit.fit.converged);
        assert!(
            fit.fit
                .warnings
                .iter()
                .any(|w| w.code == ModelWarningCode::KineticLimitation)
        );
    }
    println!(
        "coverage of the 95 % intervals in 80 runs: kf {kf_in}, D {d_in}; mean z of D {:.3}",
        z_sum / 80.0
    );
    assert!(
        kf_in >= 70 && d_in >= 70,
        "coverage kf {kf_in}/80, D {d_in}/80"
    );
}

#[test]
fn recovers_kf_and_d_in_the_quasi_reversible_case() {
    let back = BackReaction::QuasiReversible {
        kb_over_kf: 0.3,
        dr_over_do: 0.8,
    };
    let kf = 5e-5;
    let (t, i) = synthetic(kf, back, 1e-3, 30.0, 0.005, 7);
    let cell = KineticCell {
        n: N,
        area_m2: AREA_M2,
        conc_mol_m3: CONC_MOL_M3,
        back,
    };
    let fit = fit_kinetics(
        &Transient {
            time_s: &t,
            current_a: &i,
        },
        &cell,
    )
    .unwrap();
    let kf_hat = fit.fit.params[0].estimate;
    let d_hat = fit.fit.diffusion_m2_s.unwrap();
    println!("quasi-reversible: kf = {kf_hat:?}, D = {d_hat:?}");
    assert!(kf_hat.ci95[0] < kf && kf < kf_hat.ci95[1]);
    assert!(d_hat.ci95[0] < D_M2_S && D_M2_S < d_hat.ci95[1]);
    assert!((kf_hat.value / kf - 1.0).abs() < 0.02);
    assert!((d_hat.value / D_M2_S - 1.0).abs() < 0.02);
}

#[test]
fn a_cottrellian_transient_is_refused_with_a_reason() {
    // kf = 1 m/s (100 cm/s): H√t > 100 at 1 ms; no kinetic information at all.
    let t: Vec<f64> = (1..=200).map(|k| 1e-3 * k as f64).collect();
    let i: Vec<f64> = t
        .iter()
        .map(|&t| cottrell_current_a(N, AREA_M2, CONC_MOL_M3, D_M2_S, t))
        .collect();
    let cell = KineticCell {
        n: N,
        area_m2: AREA_M2,
        conc_mol_m3: CONC_MOL_M3,
        back: BackReaction::Irreversible,
    };
    let err = fit_kinetics(
        &Transient {
            time_s: &t,
            current_a: &i,
        },
        &cell,
    )
    .unwrap_err();
    assert!(matches!(err, ModelError::NotIdentifiable(_)), "{err:?}");
    assert_eq!(
        err.to_string(),
        "the current follows Cottrell's law from the first point (1.00 ms): kf is too large to measure in this window (H√t > 30); use the planar Cottrell analysis or shorter times"
    );
}

#[test]
fn bad_inputs_are_refused() {
    let t = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
    let i = [1.0; 6];
    let cell = KineticCell {
        n: N,
        area_m2: -1.0,
        conc_mol_m3: CONC_MOL_M3,
        back: BackReaction::Irreversible,
    };
    let err = fit_kinetics(
        &Transient {
            time_s: &t,
            current_a: &i,
        },
        &cell,
    )
    .unwrap_err();
    assert_eq!(
        err.to_string(),
        "area must be a positive finite number, got -1"
    );
    let cell = KineticCell {
        area_m2: AREA_M2,
        ..cell
    };
    let t_bad = [1.0, 2.0, 2.0, 4.0, 5.0, 6.0];
    let err = fit_kinetics(
        &Transient {
            time_s: &t_bad,
            current_a: &i,
        },
        &cell,
    )
    .unwrap_err();
    assert_eq!(
        err.to_string(),
        "kinetic transient must be strictly increasing times, got 2"
    );
}
