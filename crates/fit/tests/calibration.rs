//! Calibration of the intervals: synthetic Cottrell transients with a known D and noise of a
//! known kind, each analysed as a user would (automatic windows, t0 refined, intercept fitted).
//! The 95 % interval of D must cover the true value in 93–97 % of them, with white noise and
//! with AR(1) noise (φ = 0.8). The transients are synthetic; the true current is the Cottrell
//! equation (F. G. Cottrell, Z. Phys. Chem. 42 (1903) 385) as implemented in
//! `models::planar`, whose own values are checked against worked values and a finite-difference
//! solution in other tests.

use diffusor_fit::cell::{Cell, Measured};
use diffusor_fit::models::planar::cottrell_current_a;
use diffusor_fit::planar::{PlanarOptions, analyze_data};
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

const RUNS: usize = 500;
const D_TRUE: f64 = 7.0e-10; // m²/s = 7.0e-6 cm²/s
const AREA: f64 = 7.07e-6; // m², a 3 mm disk
const CONC: f64 = 1.0; // mol/m³ = 1 mM

fn coverage(phi: f64, seed: u64) -> (usize, f64) {
    let mut rng = StdRng::seed_from_u64(seed);
    let sigma = 20e-9; // A, marginal noise
    let innovation = Normal::new(0.0, sigma * (1.0 - phi * phi).sqrt()).expect("normal");
    let time: Vec<f64> = (1..=4000).map(|k| k as f64 * 1e-3).collect();
    let cell = Cell {
        area_m2: Some(Measured::exact(AREA)),
        conc_mol_m3: Some(Measured::exact(CONC)),
        ..Cell::default()
    };
    let options = PlanarOptions {
        sensitivity: false,
        ..PlanarOptions::default()
    };
    let mut covered = 0;
    let mut rel_width = 0.0;
    for _ in 0..RUNS {
        let mut e = Normal::new(0.0, sigma).expect("normal").sample(&mut rng);
        let current: Vec<f64> = time
            .iter()
            .map(|&t| {
                e = phi * e + innovation.sample(&mut rng);
                cottrell_current_a(1.0, AREA, CONC, D_TRUE, t) + e
            })
            .collect();
        let r = analyze_data(&time, &current, &cell, &options, "none".into(), Vec::new())
            .expect("analysis");
        let d = r.diffusion_m2_s.expect("D");
        if d.ci95[0] <= D_TRUE && D_TRUE <= d.ci95[1] {
            covered += 1;
        }
        rel_width += (d.ci95[1] - d.ci95[0]) / D_TRUE / RUNS as f64;
    }
    (covered, rel_width)
}

#[test]
fn white_noise_intervals_cover_95_percent() {
    let (covered, width) = coverage(0.0, 20_261_202);
    let share = covered as f64 / RUNS as f64;
    println!(
        "white noise: {covered}/{RUNS} = {:.1} % covered, mean relative width {width:.4}",
        100.0 * share
    );
    assert!((0.93..=0.97).contains(&share), "coverage {share}");
}

#[test]
fn ar1_noise_intervals_cover_95_percent() {
    let (covered, width) = coverage(0.8, 20_261_203);
    let share = covered as f64 / RUNS as f64;
    println!(
        "AR(1) φ = 0.8: {covered}/{RUNS} = {:.1} % covered, mean relative width {width:.4}",
        100.0 * share
    );
    assert!((0.93..=0.97).contains(&share), "coverage {share}");
}
