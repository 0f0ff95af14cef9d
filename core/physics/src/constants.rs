//! Physical constants, CODATA 2018 (SI). The first four are exact by the 2019 SI definition.

/// Elementary charge, C (exact).
pub const ELEMENTARY_CHARGE_C: f64 = 1.602_176_634e-19;
/// Planck constant, J s (exact).
pub const PLANCK_J_S: f64 = 6.626_070_15e-34;
/// Reduced Planck constant h / 2 pi, J s.
pub const REDUCED_PLANCK_J_S: f64 = PLANCK_J_S / (2.0 * std::f64::consts::PI);
/// Boltzmann constant, J/K (exact).
pub const BOLTZMANN_J_PER_K: f64 = 1.380_649e-23;
/// Boltzmann constant in eV/K (k_B / e).
pub const BOLTZMANN_EV_PER_K: f64 = BOLTZMANN_J_PER_K / ELEMENTARY_CHARGE_C;
/// Electron rest mass, kg (CODATA 2018, measured).
pub const ELECTRON_MASS_KG: f64 = 9.109_383_701_5e-31;
/// Vacuum permittivity, F/m (CODATA 2018, measured).
pub const VACUUM_PERMITTIVITY_F_PER_M: f64 = 8.854_187_812_8e-12;

#[cfg(test)]
mod tests {
    use super::*;

    // Source: CODATA 2018 recommended values (k_B/e = 8.617333262e-5 eV/K, h/e^2 = 25812.80745 ohm).
    #[test]
    fn derived_constants_match_codata_2018() {
        assert!((BOLTZMANN_EV_PER_K / 8.617_333_262e-5 - 1.0).abs() < 1e-9);
        let von_klitzing = PLANCK_J_S / (ELEMENTARY_CHARGE_C * ELEMENTARY_CHARGE_C);
        assert!((von_klitzing / 25_812.807_45 - 1.0).abs() < 1e-9);
        // kT at 300 K = 25.851999 meV, computed from the CODATA 2018 k_B/e above.
        assert!((BOLTZMANN_EV_PER_K * 300.0 * 1e3 / 25.851_999 - 1.0).abs() < 1e-7);
    }
}
