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

use nalgebra::{DMatrix, DVector};

use crate::solver::LeastSquaresProblem;

/// Cottrell with a free time origin: `I = S·(t − t0)^-½ + b`, parameters `[S, b, t0]`
/// (A·s^½, A, s). A step onset a fraction of a sample off bends the Cottrell plot at short times;
/// fitting t0 removes that bias. Defined for t > t0 only.
#[derive(Debug, Clone, Copy)]
pub struct ShiftedCottrell<'a> {
    /// Times after the nominal onset, in s.
    pub time_s: &'a [f64],
    /// Currents in A (faradaic sign positive).
    pub current_a: &'a [f64],
    /// Whether b is fitted (else held at 0 and its column is dropped).
    pub intercept: bool,
}

impl LeastSquaresProblem for ShiftedCottrell<'_> {
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
        let (s, b, t0) = if self.intercept {
            (p[0], p[1], p[2])
        } else {
            (p[0], 0.0, p[1])
        };
        DVector::from_iterator(
            self.time_s.len(),
            self.time_s.iter().zip(self.current_a).map(|(&t, &y)| {
                let dt = t - t0;
                if dt > 0.0 {
                    y - s / dt.sqrt() - b
                } else {
                    f64::NAN
                }
            }),
        )
    }

    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
        let (s, t0) = if self.intercept {
            (p[0], p[2])
        } else {
            (p[0], p[1])
        };
        let cols = if self.intercept { 3 } else { 2 };
        DMatrix::from_fn(self.time_s.len(), cols, |i, j| {
            let dt = self.time_s[i] - t0;
            match (j, self.intercept) {
                (0, _) => -1.0 / dt.sqrt(),
                (1, true) => -1.0,
                // ∂/∂t0 of −S·(t − t0)^-½ is −S/2·(t − t0)^-3/2.
                _ => -0.5 * s / (dt * dt.sqrt()),
            }
        })
    }
}

/// Cottrell plus the double-layer charging current after a potential step through the
/// uncompensated resistance: `I = S·t^-½ + b + A·exp(−t/τ)` with A = ΔE/Ru and τ = Ru·Cdl (the
/// RC charging of the double layer, A. J. Bard & L. R. Faulkner, *Electrochemical Methods*,
/// 2nd ed., 2001, §1.2.2). Parameters `[S, b, ln A, ln τ]`, logarithms so A and τ stay positive.
#[derive(Debug, Clone, Copy)]
pub struct CottrellCharging<'a> {
    /// Times after the onset, in s.
    pub time_s: &'a [f64],
    /// Currents in A (faradaic sign positive).
    pub current_a: &'a [f64],
}

impl LeastSquaresProblem for CottrellCharging<'_> {
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
        let (s, b, a, tau) = (p[0], p[1], p[2].exp(), p[3].exp());
        DVector::from_iterator(
            self.time_s.len(),
            self.time_s
                .iter()
                .zip(self.current_a)
                .map(|(&t, &y)| y - s / t.sqrt() - b - a * (-t / tau).exp()),
        )
    }

    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
        let (a, tau) = (p[2].exp(), p[3].exp());
        DMatrix::from_fn(self.time_s.len(), 4, |i, j| {
            let t = self.time_s[i];
            let e = a * (-t / tau).exp();
            match j {
                0 => -1.0 / t.sqrt(),
                1 => -1.0,
                // ∂(A e^(−t/τ))/∂ln A = A e^(−t/τ); ∂/∂ln τ = A e^(−t/τ)·t/τ.
                2 => -e,
                _ => -e * t / tau,
            }
        })
    }
}

/// [`CottrellCharging`] with a free onset, `I = S·(t − t0)^-½ + b + A·exp(−t/τ)`, parameters
/// `[S, b, t0, ln A, ln τ]` (b dropped without an intercept). The charging decays from the
/// nominal onset, where the potential stepped; the onset of the faradaic current is free
/// because the two are confounded at short times (used to find the window's lower bound, and
/// by the Cottrell-plus-charging model, where the amplitude at the fitted onset is
/// `A·exp(−t0/τ)`).
#[derive(Debug, Clone, Copy)]
pub struct ShiftedCottrellCharging<'a> {
    /// Times after the nominal onset, in s.
    pub time_s: &'a [f64],
    /// Currents in A (faradaic sign positive).
    pub current_a: &'a [f64],
    /// Whether b is fitted (else held at 0 and its column is dropped).
    pub intercept: bool,
}

impl ShiftedCottrellCharging<'_> {
    fn unpack(&self, p: &DVector<f64>) -> (f64, f64, f64, f64, f64) {
        if self.intercept {
            (p[0], p[1], p[2], p[3].exp(), p[4].exp())
        } else {
            (p[0], 0.0, p[1], p[2].exp(), p[3].exp())
        }
    }
}

impl LeastSquaresProblem for ShiftedCottrellCharging<'_> {
    fn residuals(&self, p: &DVector<f64>) -> DVector<f64> {
        let (s, b, t0, a, tau) = self.unpack(p);
        DVector::from_iterator(
            self.time_s.len(),
            self.time_s.iter().zip(self.current_a).map(|(&t, &y)| {
                let dt = t - t0;
                if dt > 0.0 {
                    y - s / dt.sqrt() - b - a * (-t / tau).exp()
                } else {
                    f64::NAN
                }
            }),
        )
    }

    fn jacobian(&self, p: &DVector<f64>) -> DMatrix<f64> {
        let (s, _, t0, a, tau) = self.unpack(p);
        let cols = if self.intercept { 5 } else { 4 };
        DMatrix::from_fn(self.time_s.len(), cols, |i, j| {
            let t = self.time_s[i];
            let dt = t - t0;
            let e = a * (-t / tau).exp();
            let j = if self.intercept || j == 0 { j } else { j + 1 };
            match j {
                0 => -1.0 / dt.sqrt(),
                1 => -1.0,
                // ∂/∂t0 of −S·(t − t0)^-½ is −S/2·(t − t0)^-3/2.
                2 => -0.5 * s / (dt * dt.sqrt()),
                // ∂(A e^(−t/τ))/∂ln A = A e^(−t/τ); ∂/∂ln τ = A e^(−t/τ)·t/τ.
                3 => -e,
                _ => -e * t / tau,
            }
        })
    }
}
