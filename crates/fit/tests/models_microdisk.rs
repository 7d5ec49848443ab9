//! The inlaid-disk expressions of Shoup & Szabo (J. Electroanal. Chem. 140 (1982) 237) and
//! Mahon & Oldham (Anal. Chem. 77 (2005) 6100): their limits, their agreement with each other,
//! a worked steady-state value, and the recovery of D and C from noisy synthetic transients
//! with the two closed-form cross-checks.

use diffusor_fit::constants::{CM2_PER_S, FARADAY_C_PER_MOL};
use diffusor_fit::models::common::{Known, Transient};
use diffusor_fit::models::microdisk::{
    DiskExpression, MAHON_OLDHAM_JOIN_THETA, fit_microdisk, mahon_oldham_df, mahon_oldham_f,
    microdisk_current_a, shoup_szabo_df, shoup_szabo_f,
};
use diffusor_fit::models::planar::cottrell_current_a;
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

const PI: f64 = std::f64::consts::PI;
const R_M: f64 = 5e-6;
const C: f64 = 1.0;
const D_M2_S: f64 = 7.8e-6 * CM2_PER_S;

#[test]
fn both_expressions_at_tau_one() {
    // Computed from the two published formulas (not quoted from either paper): at τ = 1,
    // Shoup–Szabo f = 0.7854 + 0.8862 + 0.2146·e^-0.7823 = 1.769 75 and Mahon–Oldham
    // f = (π/4)·g(0.25) = 1.760 14 (independently evaluated in double precision outside this
    // code base).
    assert!(
        (shoup_szabo_f(1.0) - 1.769_75).abs() < 5e-6,
        "{}",
        shoup_szabo_f(1.0)
    );
    assert!(
        (mahon_oldham_f(1.0) - 1.760_14).abs() < 5e-6,
        "{}",
        mahon_oldham_f(1.0)
    );
}

#[test]
fn the_two_expressions_agree_within_seven_tenths_of_a_percent_everywhere() {
    // Shoup & Szabo state their form is within 0.6 % of the exact current (as remembered); so
    // the two should differ by little more than that at any τ. Measured here: at most 0.67 %,
    // near τ = 1.85.
    let mut worst = (0.0f64, 0.0);
    for k in 0..=14_000 {
        let tau = 10f64.powf(-6.0 + 14.0 * k as f64 / 14_000.0);
        let d = (shoup_szabo_f(tau) / mahon_oldham_f(tau) - 1.0).abs();
        if d > worst.0 {
            worst = (d, tau);
        }
    }
    println!(
        "largest |f_SS/f_MO − 1| = {:.4e} at τ = {:.3}",
        worst.0, worst.1
    );
    assert!(worst.0 < 7e-3, "{worst:?}");
}

#[test]
fn short_times_give_cottrell_plus_the_edge_term() {
    // The exact short-time behaviour of the disk: I = n·F·A·C·√D/√(πt) + π·n·F·D·C·r + O(√t)
    // (the leading terms of the Mahon–Oldham short-time series and of Shoup & Szabo's form;
    // Cottrell, Z. Phys. Chem. 42 (1903) 385, for the first). In f: √π/(2√τ) + π/4.
    for tau in [1e-8, 1e-6, 1e-4] {
        let t = tau * R_M * R_M / (4.0 * D_M2_S);
        let limit = cottrell_current_a(1.0, PI * R_M * R_M, C, D_M2_S, t)
            + PI * FARADAY_C_PER_MOL * D_M2_S * C * R_M;
        for e in [DiskExpression::MahonOldham, DiskExpression::ShoupSzabo] {
            let rel = (microdisk_current_a(1.0, R_M, C, D_M2_S, t, e) / limit - 1.0).abs();
            // The next term of the series is (π/4)·√(θ/4π) in f, below √τ relative; Shoup &
            // Szabo's 0.8862 and 0.7854 are √π/2 and π/4 rounded, 3e-5 off.
            let allowed = match e {
                DiskExpression::MahonOldham => tau.sqrt(),
                DiskExpression::ShoupSzabo => 5e-5,
            };
            assert!(rel < allowed, "{e:?} τ = {tau}: {rel:e}");
        }
    }
}

#[test]
fn long_times_give_saito_steady_state_and_its_approach() {
    // Y. Saito, Rev. Polarogr. 15 (1968) 177: I_ss = 4·n·F·D·C·r. The approach to it is
    // f = 1 + (4/π^{3/2})·τ^-½ + O(τ^-3/2) (the first two terms of the Mahon–Oldham long-time
    // series; Shoup & Szabo's form gives 0.8862 − 0.2146·0.7823 = 0.718 32 for the coefficient).
    let exact = 4.0 / PI.powf(1.5);
    for tau in [1e4, 1e6, 1e8] {
        let mo = (mahon_oldham_f(tau) - 1.0) * tau.sqrt();
        let ss = (shoup_szabo_f(tau) - 1.0) * tau.sqrt();
        // The next term, (π/4)·(25/2792)·θ^-3/2, is 0.078/τ of the coefficient.
        assert!((mo / exact - 1.0).abs() < 0.1 / tau, "MO τ = {tau}: {mo}");
        assert!(
            (ss / exact - 1.0).abs() < 1e-4 + 1.0 / tau.sqrt(),
            "SS τ = {tau}: {ss}"
        );
    }
}

#[test]
fn worked_steady_state_current() {
    // r = 5 µm, C = 1 mM, D = 7.8e-6 cm²/s: 4·F·D·C·r = 4 × 96 485.332 12 × 7.8e-10 × 1 × 5e-6
    // = 1.505 17 nA (computed from Saito's equation with the CODATA 2018 F), reached as t → ∞.
    let t = 1e12;
    for e in [DiskExpression::MahonOldham, DiskExpression::ShoupSzabo] {
        let i = microdisk_current_a(1.0, R_M, C, D_M2_S, t, e);
        assert!((i / 1.505_17e-9 - 1.0).abs() < 1e-5, "{e:?}: {i:e}");
    }
}

#[test]
fn mahon_oldham_branches_meet_at_the_join() {
    // Mahon & Oldham join their series at θ = 1.281; with the right coefficients the two
    // branches agree there closely (measured 2.9e-5 relative), and a mistyped coefficient would
    // show as a jump.
    let tau = 4.0 * MAHON_OLDHAM_JOIN_THETA;
    let below = mahon_oldham_f(tau * (1.0 - 1e-12));
    let above = mahon_oldham_f(tau * (1.0 + 1e-12));
    println!("jump at the join: {:.3e}", above / below - 1.0);
    assert!((above / below - 1.0).abs() < 5e-5);
}

#[test]
fn derivatives_match_difference_quotients() {
    for tau in [1e-4, 0.3, 2.0, 5.0, 5.2, 40.0, 1e4] {
        let h = 1e-6 * tau;
        for (f, df) in [
            (
                mahon_oldham_f as fn(f64) -> f64,
                mahon_oldham_df as fn(f64) -> f64,
            ),
            (shoup_szabo_f, shoup_szabo_df),
        ] {
            let numeric = (f(tau + h) - f(tau - h)) / (2.0 * h);
            assert!(
                ((numeric - df(tau)) / df(tau)).abs() < 1e-5,
                "τ = {tau}: {numeric} vs {}",
                df(tau)
            );
        }
    }
}

fn noisy(e: DiskExpression, seed: u64) -> (Vec<f64>, Vec<f64>) {
    // 400 log-spaced points from 0.1 ms to 10 s: τ from 0.012 to 1250; 0.5 % noise of the
    // steady-state current.
    let mut rng = StdRng::seed_from_u64(seed);
    let m = 400;
    let t: Vec<f64> = (0..m)
        .map(|k| 1e-4 * 1e5f64.powf(k as f64 / (m - 1) as f64))
        .collect();
    let noise =
        Normal::new(0.0, 0.005 * 4.0 * FARADAY_C_PER_MOL * D_M2_S * C * R_M).expect("normal");
    let i = t
        .iter()
        .map(|&t| microdisk_current_a(1.0, R_M, C, D_M2_S, t, e) + noise.sample(&mut rng))
        .collect();
    (t, i)
}

#[test]
fn recovers_d_and_c_with_calibrated_intervals_and_both_cross_checks() {
    // Project requirement: true values within 2 % and inside the 95 % intervals, checked as
    // coverage over 80 seeds (at least 70; 76 expected).
    for e in [DiskExpression::MahonOldham, DiskExpression::ShoupSzabo] {
        let (mut d_in, mut c_in, mut long_ok, mut short_ok) = (0, 0, 0, 0);
        for seed in 0..80 {
            let (t, i) = noisy(e, seed);
            let fit = fit_microdisk(
                &Transient {
                    time_s: &t,
                    current_a: &i,
                },
                R_M,
                Known::Electrons(1.0),
                e,
            )
            .unwrap();
            let d = fit.fit.diffusion_m2_s.unwrap();
            let c = fit.fit.params[2].estimate;
            assert!(
                (d.value / D_M2_S - 1.0).abs() < 0.02,
                "{e:?} seed {seed}: {d:?}"
            );
            assert!((c.value / C - 1.0).abs() < 0.02, "{e:?} seed {seed}: {c:?}");
            d_in += usize::from(d.ci95[0] < D_M2_S && D_M2_S < d.ci95[1]);
            c_in += usize::from(c.ci95[0] < C && C < c.ci95[1]);
            let long = fit.long_time.as_ref().expect("long-time cross-check");
            let short = fit
                .short_time_and_steady_state
                .as_ref()
                .expect("short-time cross-check");
            long_ok += usize::from(
                long.diffusion_m2_s.ci95[0] < D_M2_S && D_M2_S < long.diffusion_m2_s.ci95[1],
            );
            short_ok += usize::from(
                short.diffusion_m2_s.ci95[0] < D_M2_S && D_M2_S < short.diffusion_m2_s.ci95[1],
            );
            if seed == 0 {
                println!(
                    "{e:?}: D = {:.5e} ± {:.1e}, C = {:.4} ± {:.1e}; long-time D = {:.4e} ± {:.1e} ({} pts), short+steady D = {:.4e} ± {:.1e}; τ {:.3}–{:.0}",
                    d.value,
                    d.std_error,
                    c.value,
                    c.std_error,
                    long.diffusion_m2_s.value,
                    long.diffusion_m2_s.std_error,
                    long.points,
                    short.diffusion_m2_s.value,
                    short.diffusion_m2_s.std_error,
                    fit.tau_range[0],
                    fit.tau_range[1]
                );
            }
        }
        println!(
            "{e:?}: coverage D {d_in}/80, C {c_in}/80, long-time D {long_ok}/80, short+steady D {short_ok}/80"
        );
        assert!(
            d_in >= 70 && c_in >= 70,
            "{e:?}: coverage D {d_in}, C {c_in}"
        );
        // The cross-checks rest on the exact short- and long-time series, which the
        // Mahon–Oldham form reproduces term by term; they neglect the next terms, so they are
        // checked more loosely: most intervals must still hold the true D. On data shaped by
        // Shoup & Szabo's approximation they are biased by that form's own 0.6 % error
        // (measured: long-time 45/80, short-time 8/80), which is the form's error, not theirs.
        if e == DiskExpression::MahonOldham {
            assert!(
                long_ok >= 68 && short_ok >= 68,
                "{e:?}: long {long_ok}, short {short_ok}"
            );
        }
    }
}

#[test]
fn mahon_oldham_long_branch_follows_the_long_time_series() {
    // The long-time series of the disk current, f(τ) = 1 + 0.71835·τ^-½ + 0.05626·τ^-3/2
    // − 0.00646·τ^-5/2 + … with τ = 4Dt/r² (Aoki & Osteryoung, J. Electroanal. Chem. 160
    // (1984) 335; Shoup & Szabo 1982 quote the same leading terms). The coefficients are as
    // remembered, to the digits given, not read from the papers here. It checks Mahon &
    // Oldham's coefficients independently of the transcriptions they were taken from: the
    // τ^-3/2 one (25/2792 in θ) to the rounding of the remembered digits, the τ^-5/2 one
    // (1/3880, giving 0.006478) only loosely, because Mahon & Oldham's own τ^-7/2 term
    // (−0.0223) is allowed for beside it. Computed: the largest gap is 4.3e-5 at τ = 6.
    for tau in [6.0_f64, 10.0, 30.0, 100.0, 1000.0] {
        let series =
            1.0 + 0.71835 / tau.sqrt() + 0.05626 * tau.powf(-1.5) - 0.00646 * tau.powf(-2.5);
        let rounding = 5e-6 * tau.powf(-0.5) + 5e-6 * tau.powf(-1.5) + 2e-5 * tau.powf(-2.5);
        let next_term = 0.03 * tau.powf(-3.5);
        let gap = (mahon_oldham_f(tau) - series).abs();
        assert!(gap < rounding + next_term, "τ = {tau}: gap {gap:e}");
    }
}
