//! Worked values of the Cottrell equation and its inverses.
//!
//! The expected currents are computed for this test from the Cottrell
//! equation `I = n·F·A·C·√D/√(π·t)` (F. G. Cottrell, Z. Phys. Chem. 42 (1903)
//! 385) with the CODATA 2018 Faraday constant `F = 96 485.332 12 C/mol`, by
//! hand (double-precision arithmetic outside this code base), not taken from
//! a publication. The order-of-magnitude facts at the end are common practice
//! in the trade, with no single source.

use diffusor_fit::constants::{CM2_PER_S, FARADAY_C_PER_MOL, MILLIMOLAR};
use diffusor_fit::models::planar::{
    cottrell_current_a, cottrell_slope, diffusion_from_slope, nac_from_slope,
};
use proptest::prelude::*;

/// A 3.00 mm disk: `A = π·(0.15 cm)² = 0.070 685 8 cm²` (geometry).
const AREA_M2: f64 = 0.070_685_8e-4;
/// 1.000 mM.
const CONC_MOL_M3: f64 = 1.000 * MILLIMOLAR;
/// 7.20 × 10⁻⁶ cm²/s.
const D_M2_S: f64 = 7.20e-6 * CM2_PER_S;

/// Rounds to `digits` significant figures, the way a value is quoted.
fn significant(x: f64, digits: i32) -> f64 {
    let scale = 10f64.powi(digits - 1 - x.abs().log10().floor() as i32);
    (x * scale).round() / scale
}

#[test]
fn disk_area_is_pi_r_squared() {
    // π·(0.15 cm)² = 0.070 685 834 7… cm², quoted to 6 significant figures.
    let area_cm2 = std::f64::consts::PI * 0.15 * 0.15;
    assert_eq!(significant(area_cm2, 6), 0.070_685_8);
    assert!((AREA_M2 / 1e-4 - area_cm2).abs() / area_cm2 < 1e-6);
}

#[test]
fn one_millimolar_is_one_mole_per_cubic_metre() {
    // 1 mmol/L = 1e-3 mol / 1e-3 m³.
    assert_eq!(MILLIMOLAR, 1e-3 / 1e-3);
    assert_eq!(CM2_PER_S, 1e-2 * 1e-2);
}

#[test]
fn cottrell_current_at_one_second() {
    // n = 1, A = 0.070 685 8 cm², C = 1.000 mM, D = 7.20e-6 cm²/s, t = 1 s:
    // I = 96 485.332 12 × 7.068 58e-6 m² × 1 mol/m³ × √(7.2e-10/π) m/s^½
    //   = 1.032 487e-5 A = 10.325 µA to 5 significant figures.
    let current_a = cottrell_current_a(1.0, AREA_M2, CONC_MOL_M3, D_M2_S, 1.0);
    assert_eq!(
        significant(current_a * 1e6, 5),
        10.325,
        "I(1 s) = {current_a:e} A"
    );
}

#[test]
fn cottrell_current_at_a_tenth_of_a_second() {
    // Same electrode at t = 0.1 s: I = 10.324 87 µA × √10 = 32.650 µA to 5
    // significant figures.
    let current_a = cottrell_current_a(1.0, AREA_M2, CONC_MOL_M3, D_M2_S, 0.1);
    assert_eq!(
        significant(current_a * 1e6, 5),
        32.650,
        "I(0.1 s) = {current_a:e} A"
    );
}

#[test]
fn two_electrons_double_the_current() {
    // I is proportional to n in the Cottrell equation: 20.650 µA at 1 s.
    let current_a = cottrell_current_a(2.0, AREA_M2, CONC_MOL_M3, D_M2_S, 1.0);
    assert_eq!(significant(current_a * 1e6, 5), 20.650);
}

#[test]
fn slope_is_current_times_root_time() {
    // I·√t is the Cottrell slope S = n·F·A·C·√(D/π) at every t.
    let slope = cottrell_slope(1.0, AREA_M2, CONC_MOL_M3, D_M2_S);
    assert_eq!(significant(slope * 1e6, 5), 10.325);
    for t_s in [0.01, 0.1, 1.0, 10.0] {
        let current_a = cottrell_current_a(1.0, AREA_M2, CONC_MOL_M3, D_M2_S, t_s);
        assert!((current_a * t_s.sqrt() - slope).abs() <= 1e-14 * slope);
    }
}

#[test]
fn quoted_current_gives_back_the_diffusion_coefficient() {
    // The current as quoted (10.325 µA at 1 s) is rounded to 5 significant
    // figures, so D = π·(S/(nFAC))² comes back within 2·(0.0005/10.325) ≈ 1e-4
    // of 7.20e-6 cm²/s, and is 7.200e-6 cm²/s to 4 significant figures.
    let d_m2_s = diffusion_from_slope(10.325e-6, 1.0, AREA_M2, CONC_MOL_M3);
    assert!(
        (d_m2_s - D_M2_S).abs() / D_M2_S < 1e-4,
        "D = {d_m2_s:e} m²/s"
    );
    assert_eq!(significant(d_m2_s / CM2_PER_S, 4), 7.200e-6);
    // And n·A·C from the same slope when D is known: 1 × 7.068 58e-6 m² ×
    // 1 mol/m³ = 7.068 58e-6 mol/m, again within the rounding of the current.
    let nac = nac_from_slope(10.325e-6, D_M2_S);
    assert!((nac - AREA_M2 * CONC_MOL_M3).abs() / (AREA_M2 * CONC_MOL_M3) < 1e-4);
}

#[test]
fn faraday_constant_is_codata_2018() {
    // The worked values above assume F = 96 485.332 12 C/mol (CODATA 2018).
    assert!((FARADAY_C_PER_MOL - 96_485.332_12).abs() < 5e-6);
}

proptest! {
    /// D → slope → D and n·A·C → slope → n·A·C are identities of the
    /// Cottrell equation; over realistic ranges (n 1–3, disks from 10 µm²
    /// to 1 cm², 0.01–100 mM, D from 1e-7 to 1e-4 cm²/s) they hold to
    /// rounding.
    #[test]
    fn inverses_round_trip(
        n in 1u8..=3,
        area_m2 in 1e-11f64..1e-4,
        conc_mol_m3 in 0.01f64..100.0,
        d_cm2_s in 1e-7f64..1e-4,
    ) {
        let n = f64::from(n);
        let d_m2_s = d_cm2_s * CM2_PER_S;
        let slope = cottrell_slope(n, area_m2, conc_mol_m3, d_m2_s);
        let d_back = diffusion_from_slope(slope, n, area_m2, conc_mol_m3);
        prop_assert!((d_back - d_m2_s).abs() <= 1e-13 * d_m2_s, "D {} → {}", d_m2_s, d_back);
        let nac = n * area_m2 * conc_mol_m3;
        let nac_back = nac_from_slope(slope, d_m2_s);
        prop_assert!((nac_back - nac).abs() <= 1e-13 * nac, "nAC {} → {}", nac, nac_back);
    }
}

#[test]
fn small_molecules_in_water_diffuse_at_1e_minus_10_to_1e_minus_9_m2_per_s() {
    // Common practice, no single source: D of small molecules and ions in
    // water lies around 1e-6 to 1e-5 cm²/s, which in SI is 1e-10 to 1e-9
    // m²/s; the worked example's 7.2e-6 cm²/s sits inside.
    let low_m2_s = 1e-6 * CM2_PER_S;
    let high_m2_s = 1e-5 * CM2_PER_S;
    assert!((low_m2_s - 1e-10).abs() < 1e-24);
    assert!((high_m2_s - 1e-9).abs() < 1e-23);
    assert!((low_m2_s..=high_m2_s).contains(&D_M2_S));
}

#[test]
fn a_molecule_travels_about_45_micrometres_in_a_second() {
    // The root-mean-square displacement in one dimension is √(2Dt)
    // (A. Einstein, Ann. Phys. 17 (1905) 549). With D = 1e-5 cm²/s and
    // t = 1 s: √(2 × 1e-5 cm²) = 4.47e-3 cm = 44.7 µm, "about 45 µm" as the
    // trade says (common practice, no single source).
    let d_m2_s = 1e-5 * CM2_PER_S;
    let rms_m = (2.0 * d_m2_s * 1.0).sqrt();
    assert_eq!(significant(rms_m * 1e6, 3), 44.7);
    assert!((rms_m * 1e6 - 45.0).abs() < 0.5);
}
