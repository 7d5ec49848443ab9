//! Planar semi-infinite diffusion to an electrode after a potential step to the
//! diffusion-limited potential.

use crate::constants::FARADAY_C_PER_MOL;

/// The Cottrell current (F. G. Cottrell, Z. Phys. Chem. 42 (1903) 385):
/// `I(t) = n·F·A·C·√D / √(π·t)`, in A, for `n` electrons, area `area_m2` (m²), bulk
/// concentration `conc_mol_m3` (mol/m³, numerically mM), diffusion coefficient `d_m2_s` (m²/s)
/// and time since the step `t_s` (s).
///
/// Valid while the diffusion layer (~√(πDt)) is thin compared with the electrode's size, after
/// the double-layer charging has decayed and before natural convection sets in.
pub fn cottrell_current_a(n: f64, area_m2: f64, conc_mol_m3: f64, d_m2_s: f64, t_s: f64) -> f64 {
    cottrell_slope(n, area_m2, conc_mol_m3, d_m2_s) / t_s.sqrt()
}

/// The Cottrell slope `S = n·F·A·C·√(D/π)` in A·s^½, so that `I = S·t^-½`.
pub fn cottrell_slope(n: f64, area_m2: f64, conc_mol_m3: f64, d_m2_s: f64) -> f64 {
    n * FARADAY_C_PER_MOL * area_m2 * conc_mol_m3 * (d_m2_s / std::f64::consts::PI).sqrt()
}

/// D from a Cottrell slope: `D = π·(S/(n·F·A·C))²` in m²/s.
pub fn diffusion_from_slope(slope: f64, n: f64, area_m2: f64, conc_mol_m3: f64) -> f64 {
    let k = slope / (n * FARADAY_C_PER_MOL * area_m2 * conc_mol_m3);
    std::f64::consts::PI * k * k
}

/// `n·A·C` in mol/m from a slope when D is known: `n·A·C = S·√π / (F·√D)`.
pub fn nac_from_slope(slope: f64, d_m2_s: f64) -> f64 {
    slope * std::f64::consts::PI.sqrt() / (FARADAY_C_PER_MOL * d_m2_s.sqrt())
}
