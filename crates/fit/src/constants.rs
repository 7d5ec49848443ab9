//! Physical constants, CODATA 2018 (exact since the 2019 redefinition of the SI).

/// Elementary charge e in C (exact, SI 2019).
pub const ELEMENTARY_CHARGE_C: f64 = 1.602_176_634e-19;
/// Avogadro constant N_A in 1/mol (exact, SI 2019).
pub const AVOGADRO_PER_MOL: f64 = 6.022_140_76e23;
/// Faraday constant F = e·N_A in C/mol (exact, 96 485.332 12… C/mol; CODATA 2018).
pub const FARADAY_C_PER_MOL: f64 = 96_485.332_123_310_02;
/// Molar gas constant R = k·N_A in J/(mol·K) (exact, 8.314 462 618… J/(mol·K); CODATA 2018).
pub const GAS_CONSTANT_J_PER_MOL_K: f64 = 8.314_462_618_153_24;

/// 1 cm²/s in m²/s.
pub const CM2_PER_S: f64 = 1e-4;
/// 1 mM (mmol/L) in mol/m³.
pub const MILLIMOLAR: f64 = 1.0;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn faraday_is_e_times_avogadro() {
        // CODATA 2018: F = e·N_A exactly; the product in double precision agrees to rounding.
        let product = ELEMENTARY_CHARGE_C * AVOGADRO_PER_MOL;
        assert!((product - FARADAY_C_PER_MOL).abs() / FARADAY_C_PER_MOL < 2e-16);
        // The value as CODATA 2018 prints it: 96 485.332 12 C/mol.
        assert!((FARADAY_C_PER_MOL - 96_485.332_12).abs() < 5e-6);
    }

    #[test]
    fn gas_constant_is_boltzmann_times_avogadro() {
        // k = 1.380 649e-23 J/K exactly (SI 2019); CODATA 2018 prints R = 8.314 462 618 J/(mol·K).
        let product = 1.380_649e-23 * AVOGADRO_PER_MOL;
        assert!((product - GAS_CONSTANT_J_PER_MOL_K).abs() / GAS_CONSTANT_J_PER_MOL_K < 2e-16);
    }
}
