//! Physical constants and unit conversions.
//!
//! Source: CODATA 2018 recommended values (Tiesinga et al., Rev. Mod. Phys. 93,
//! 025010, 2021). Since the 2019 SI redefinition k_B and N_A are exact, so the
//! molar gas constant R = k_B·N_A is exact too.

/// Boltzmann constant k_B in J/K (exact, CODATA 2018).
pub const BOLTZMANN_J_K: f64 = 1.380_649e-23;

/// Avogadro constant N_A in 1/mol (exact, CODATA 2018).
pub const AVOGADRO_PER_MOL: f64 = 6.022_140_76e23;

/// Molar gas constant R = k_B·N_A in J/(mol·K) (exact, CODATA 2018).
pub const MOLAR_GAS_CONSTANT_J_MOL_K: f64 = 8.314_462_618_153_24;

/// Standard atmosphere in Pa (exact by definition, ISO 2533 / CGPM 1954).
pub const STANDARD_ATMOSPHERE_PA: f64 = 101_325.0;

/// 0 °C in kelvin (exact by definition of the Celsius scale).
pub const ZERO_CELSIUS_K: f64 = 273.15;

/// One bar in pascal (exact by definition).
pub const BAR_PA: f64 = 100_000.0;

/// One pound-force per square inch in pascal (exact: 0.45359237 kg ×
/// 9.80665 m/s² / 0.0254² m², NIST SP 811).
pub const PSI_PA: f64 = 6_894.757_293_168_361;

/// Converts degrees Celsius to kelvin.
pub fn celsius_to_kelvin(c: f64) -> f64 {
    c + ZERO_CELSIUS_K
}

/// Converts degrees Fahrenheit to kelvin.
pub fn fahrenheit_to_kelvin(f: f64) -> f64 {
    (f - 32.0) * 5.0 / 9.0 + ZERO_CELSIUS_K
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn r_is_kb_times_na() {
        // CODATA 2018: R = k_B·N_A exactly.
        let r = BOLTZMANN_J_K * AVOGADRO_PER_MOL;
        assert!((r - MOLAR_GAS_CONSTANT_J_MOL_K).abs() < 1e-14);
    }

    #[test]
    fn psi_from_pound_and_inch() {
        // NIST SP 811: 1 lbf = 0.45359237 kg × 9.80665 m/s²; 1 in = 0.0254 m.
        let psi = 0.453_592_37 * 9.806_65 / (0.0254 * 0.0254);
        assert!((psi - PSI_PA).abs() < 1e-9);
    }
}
