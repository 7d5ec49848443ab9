//! Cottrell plus RC charging fitted jointly (Cottrell, Z. Phys. Chem. 42 (1903) 385; RC
//! charging as in Bard & Faulkner, Electrochemical Methods, 2nd ed., 2001): recovery of
//! D, Ru and Cdl from noisy synthetic transients that include the charging region.

use diffusor_fit::constants::CM2_PER_S;
use diffusor_fit::models::charging::{ChargingFit, fit_cottrell_charging};
use diffusor_fit::models::common::{ModelError, Transient};
use diffusor_fit::models::planar::cottrell_current_a;
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

const AREA_M2: f64 = 7.07e-6;
const C: f64 = 1.0;
const D_M2_S: f64 = 7.2e-6 * CM2_PER_S;
/// A 0.5 V step through 100 Ω onto 20 µF/cm² × 0.0707 cm² = 1.41 µF: τ = 141 µs.
const STEP_V: f64 = 0.5;
const RU_OHM: f64 = 100.0;
const CDL_F: f64 = 1.414e-6;

fn transient(seed: u64) -> (Vec<f64>, Vec<f64>) {
    transient_from(seed, 2e-5, 2e-8)
}

/// 2000 samples 20 µs apart from `t_first` on, with a background `b` and 50 nA of noise.
fn transient_from(seed: u64, t_first: f64, b: f64) -> (Vec<f64>, Vec<f64>) {
    let mut rng = StdRng::seed_from_u64(seed);
    let noise = Normal::new(0.0, 5e-8).expect("normal");
    let tau = RU_OHM * CDL_F;
    let t: Vec<f64> = (0..2000).map(|k| t_first + 2e-5 * k as f64).collect();
    let i = t
        .iter()
        .map(|&t| {
            cottrell_current_a(1.0, AREA_M2, C, D_M2_S, t)
                + b
                + STEP_V / RU_OHM * (-t / tau).exp()
                + noise.sample(&mut rng)
        })
        .collect();
    (t, i)
}

/// The fit with this cell's n, A and C and its step height.
fn fit_cell(t: &[f64], i: &[f64]) -> ChargingFit {
    fit_cottrell_charging(
        &Transient {
            time_s: t,
            current_a: i,
        },
        Some((1.0, AREA_M2, C)),
        Some(STEP_V),
    )
    .expect("the charging fit")
}

#[test]
fn recovers_d_ru_and_cdl_with_every_point_used() {
    // Project requirement: true values within 2 % and inside the 95 % intervals, as coverage
    // over 40 seeds (at least 34).
    let (mut d_in, mut ru_in, mut c_in) = (0, 0, 0);
    for seed in 0..40 {
        let (t, i) = transient(seed);
        let fit = fit_cell(&t, &i);
        let d = fit.fit.diffusion_m2_s.unwrap();
        let (ru, cdl) = fit.ru_ohm_and_cdl_f.unwrap();
        if seed == 0 {
            println!(
                "D = {:.4e} ± {:.1e}, Ru = {:.3} ± {:.1e} Ω, Cdl = {:.4e} ± {:.1e} F, {} iterations",
                d.value,
                d.std_error,
                ru.value,
                ru.std_error,
                cdl.value,
                cdl.std_error,
                fit.fit.iterations
            );
        }
        for (name, est, truth) in [("D", d, D_M2_S), ("Ru", ru, RU_OHM), ("Cdl", cdl, CDL_F)] {
            assert!(
                (est.value / truth - 1.0).abs() < 0.02,
                "seed {seed}: {name} {est:?}"
            );
        }
        d_in += usize::from(d.ci95[0] < D_M2_S && D_M2_S < d.ci95[1]);
        ru_in += usize::from(ru.ci95[0] < RU_OHM && RU_OHM < ru.ci95[1]);
        c_in += usize::from(cdl.ci95[0] < CDL_F && CDL_F < cdl.ci95[1]);
        assert!(fit.fit.in_validity_range);
    }
    println!("coverage: D {d_in}/40, Ru {ru_in}/40, Cdl {c_in}/40");
    assert!(d_in >= 34 && ru_in >= 34 && c_in >= 34);
}

#[test]
fn a_transient_without_charging_is_refused() {
    // A rising current has no decaying part to call charging.
    let t: Vec<f64> = (1..=50).map(|k| 0.01 * k as f64).collect();
    let i: Vec<f64> = t.iter().map(|t| 1e-6 * t).collect();
    let err = fit_cottrell_charging(
        &Transient {
            time_s: &t,
            current_a: &i,
        },
        None,
        None,
    )
    .unwrap_err();
    assert!(matches!(err, ModelError::NotIdentifiable(_)), "{err:?}");
}

#[test]
fn a_charging_decay_barely_in_the_data_is_flagged() {
    // The same cell sampled from 9 τ after the step on: the charging current is down to
    // e^-9 = 1.2e-4 of ΔE/Ru at the first point, 0.6 µA on a 50 nA noise, and fades within
    // a few samples. The fit must say that τ and ΔE/Ru are not determined (this program's
    // convention: 10 % each) rather than present them as results.
    let (t, i) = transient_from(7, 9.0 * RU_OHM * CDL_F, 0.0);
    let fit = fit_cell(&t, &i);
    println!(
        "τ = {:?}, amplitude = {:?}; {}",
        fit.time_constant_s, fit.charging_amplitude_a, fit.fit.validity_check
    );
    assert!(!fit.fit.in_validity_range, "{}", fit.fit.validity_check);
    assert!(
        fit.fit
            .warnings
            .iter()
            .any(|w| w.message.contains("barely in the data")),
        "{:?}",
        fit.fit.warnings
    );
}
