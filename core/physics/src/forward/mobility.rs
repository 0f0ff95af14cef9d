//! Carrier mobility models and the Hall scattering factor.
//!
//! - Lattice (phonon) scattering as a power law, mu_L = mu_300 (T / 300 K)^-alpha.
//! - Ionized-impurity scattering after Brooks-Herring (screened Coulomb potential) and
//!   Conwell-Weisskopf (cut off at half the mean impurity spacing); both formulas as
//!   reviewed by Chattopadhyay and Queisser, Rev. Mod. Phys. 53, 745 (1981). The
//!   prefactors are built here from the CODATA constants, not copied as numbers.
//! - Matthiessen's rule, 1/mu = sum of 1/mu_i.
//! - The empirical doping dependence of Masetti, Severi and Solmi, IEEE Trans. Electron
//!   Devices 30, 764 (1983), with their Table I parameters for silicon at 300 K.
//! - The empirical doping and temperature dependence of Arora, Hauser and Roulston, IEEE
//!   Trans. Electron Devices 29, 292 (1982), for silicon electrons and holes (their fit to
//!   measured drift mobilities from about 250 to 500 K and 1e13 to 1e20 cm^-3; the
//!   parameters are recalled from memory of the paper and its textbook reproductions).
//!   With Masetti's, it is what the scattering model is validated against.
//! - The Hall scattering factor r_H of a relaxation time tau ~ E^s (Putley, The Hall Effect
//!   and Related Phenomena, 1960), through a Lanczos log-gamma.
//!
//! Inputs and outputs are SI (m^2/(V s), m^-3, K). These are elementary formulas for fits
//! and forward models: they return NaN or infinity for unphysical input rather than an
//! error; callers validate their parameters once.

use crate::constants::{
    BOLTZMANN_J_PER_K, ELECTRON_MASS_KG, ELEMENTARY_CHARGE_C, REDUCED_PLANCK_J_S, VACUUM_PERMITTIVITY_F_PER_M,
};
use std::f64::consts::PI;

/// Lattice-limited mobility mu_300 (T / 300 K)^-exponent, m^2/(V s).
pub fn lattice_mobility_m2_per_vs(mobility_300k_m2_per_vs: f64, exponent: f64, temperature_k: f64) -> f64 {
    mobility_300k_m2_per_vs * (temperature_k / 300.0).powf(-exponent)
}

/// Matthiessen's rule: the mobility of independent scattering mechanisms combined,
/// 1/mu = sum 1/mu_i. An infinite entry (a mechanism that is absent) contributes nothing.
pub fn matthiessen_m2_per_vs(mobilities_m2_per_vs: &[f64]) -> f64 {
    1.0 / mobilities_m2_per_vs.iter().map(|mu| 1.0 / mu).sum::<f64>()
}

/// The host crystal as ionized-impurity scattering sees it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ScatteringMedium {
    /// Conductivity effective mass over the free-electron mass.
    pub effective_mass_ratio: f64,
    /// Static relative permittivity.
    pub relative_permittivity: f64,
}

impl ScatteringMedium {
    /// Electrons in silicon: conductivity mass 0.26 m0, eps_r 11.7 (common handbook
    /// values).
    pub const SILICON_ELECTRONS: ScatteringMedium = ScatteringMedium {
        effective_mass_ratio: 0.26,
        relative_permittivity: 11.7,
    };

    fn permittivity_f_per_m(&self) -> f64 {
        self.relative_permittivity * VACUUM_PERMITTIVITY_F_PER_M
    }

    fn effective_mass_kg(&self) -> f64 {
        self.effective_mass_ratio * ELECTRON_MASS_KG
    }

    /// The common factor of both ionized-impurity formulas,
    /// 128 sqrt(2 pi) eps^2 (kT)^1.5 / (Z^2 e^3 m*^0.5 N_I), m^2/(V s); the mobility is this
    /// divided by the formula's logarithmic factor.
    fn impurity_prefactor_m2_per_vs(&self, impurity_density_m3: f64, temperature_k: f64, charge_number: f64) -> f64 {
        let thermal_j = BOLTZMANN_J_PER_K * temperature_k;
        let permittivity = self.permittivity_f_per_m();
        128.0 * (2.0 * PI).sqrt() * permittivity * permittivity * thermal_j * thermal_j.sqrt()
            / (charge_number
                * charge_number
                * ELEMENTARY_CHARGE_C.powi(3)
                * self.effective_mass_kg().sqrt()
                * impurity_density_m3)
    }

    /// The Brooks-Herring screening parameter b = 24 m* eps (kT)^2 / (e^2 hbar^2 n'), for a
    /// screening density n' in m^-3 (b = (2 k L_D)^2 with k the thermal wave number and L_D
    /// the Debye length).
    pub fn brooks_herring_screening_parameter(&self, screening_density_m3: f64, temperature_k: f64) -> f64 {
        let thermal_j = BOLTZMANN_J_PER_K * temperature_k;
        24.0 * self.effective_mass_kg() * self.permittivity_f_per_m() * thermal_j * thermal_j
            / (ELEMENTARY_CHARGE_C
                * ELEMENTARY_CHARGE_C
                * REDUCED_PLANCK_J_S
                * REDUCED_PLANCK_J_S
                * screening_density_m3)
    }

    /// Brooks-Herring ionized-impurity mobility, m^2/(V s):
    /// prefactor / [ln(1 + b) - b / (1 + b)]. `impurity_density_m3` is the density of
    /// charged centres N_I, `screening_density_m3` the screening density n'; `charge_number`
    /// Z is 1 for shallow dopants. Infinite when there are no charged centres.
    pub fn brooks_herring_mobility_m2_per_vs(
        &self,
        impurity_density_m3: f64,
        screening_density_m3: f64,
        temperature_k: f64,
        charge_number: f64,
    ) -> f64 {
        if impurity_density_m3 == 0.0 {
            return f64::INFINITY;
        }
        let b = self.brooks_herring_screening_parameter(screening_density_m3, temperature_k);
        // ln(1 + b) - b/(1 + b) ~ b^2 / 2 for small b: ln_1p keeps the digits there.
        let logarithmic_factor = b.ln_1p() - b / (1.0 + b);
        self.impurity_prefactor_m2_per_vs(impurity_density_m3, temperature_k, charge_number) / logarithmic_factor
    }

    /// Conwell-Weisskopf ionized-impurity mobility, m^2/(V s): prefactor / ln(1 + gamma^2),
    /// gamma = 12 pi eps kT / (Z e^2 N_I^(1/3)). Infinite when there are no charged centres.
    pub fn conwell_weisskopf_mobility_m2_per_vs(
        &self,
        impurity_density_m3: f64,
        temperature_k: f64,
        charge_number: f64,
    ) -> f64 {
        if impurity_density_m3 == 0.0 {
            return f64::INFINITY;
        }
        let gamma = 12.0 * PI * self.permittivity_f_per_m() * BOLTZMANN_J_PER_K * temperature_k
            / (charge_number * ELEMENTARY_CHARGE_C * ELEMENTARY_CHARGE_C * impurity_density_m3.cbrt());
        self.impurity_prefactor_m2_per_vs(impurity_density_m3, temperature_k, charge_number) / (gamma * gamma).ln_1p()
    }
}

/// The doping dependence of Masetti, Severi and Solmi (1983), at 300 K:
/// mu(N) = mu_min1 exp(-Pc/N) + (mu_max - mu_min2)/(1 + (N/Cr)^alpha) - mu_1/(1 + (Cs/N)^beta).
/// Stored in SI (m^2/(V s), m^-3); the presets are their Table I.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MasettiParameters {
    pub mu_min1_m2_per_vs: f64,
    pub mu_min2_m2_per_vs: f64,
    pub mu_max_m2_per_vs: f64,
    pub mu_1_m2_per_vs: f64,
    pub pc_m3: f64,
    pub cr_m3: f64,
    pub cs_m3: f64,
    pub alpha: f64,
    pub beta: f64,
}

/// cm^2/(V s) to m^2/(V s).
const CM2_PER_VS: f64 = 1e-4;
/// cm^-3 to m^-3.
const PER_CM3: f64 = 1e6;

impl MasettiParameters {
    /// Electrons in phosphorus-doped silicon (Masetti et al. 1983, Table I).
    pub const SILICON_ELECTRONS_PHOSPHORUS: MasettiParameters = MasettiParameters {
        mu_min1_m2_per_vs: 68.5 * CM2_PER_VS,
        mu_min2_m2_per_vs: 68.5 * CM2_PER_VS,
        mu_max_m2_per_vs: 1414.0 * CM2_PER_VS,
        mu_1_m2_per_vs: 56.1 * CM2_PER_VS,
        pc_m3: 0.0,
        cr_m3: 9.20e16 * PER_CM3,
        cs_m3: 3.41e20 * PER_CM3,
        alpha: 0.711,
        beta: 1.98,
    };

    /// Electrons in arsenic-doped silicon (Masetti et al. 1983, Table I).
    pub const SILICON_ELECTRONS_ARSENIC: MasettiParameters = MasettiParameters {
        mu_min1_m2_per_vs: 52.2 * CM2_PER_VS,
        mu_min2_m2_per_vs: 52.2 * CM2_PER_VS,
        mu_max_m2_per_vs: 1417.0 * CM2_PER_VS,
        mu_1_m2_per_vs: 43.4 * CM2_PER_VS,
        pc_m3: 0.0,
        cr_m3: 9.68e16 * PER_CM3,
        cs_m3: 3.43e20 * PER_CM3,
        alpha: 0.68,
        beta: 2.0,
    };

    /// Holes in boron-doped silicon (Masetti et al. 1983, Table I).
    pub const SILICON_HOLES_BORON: MasettiParameters = MasettiParameters {
        mu_min1_m2_per_vs: 44.9 * CM2_PER_VS,
        mu_min2_m2_per_vs: 0.0,
        mu_max_m2_per_vs: 470.5 * CM2_PER_VS,
        mu_1_m2_per_vs: 29.0 * CM2_PER_VS,
        pc_m3: 9.23e16 * PER_CM3,
        cr_m3: 2.23e17 * PER_CM3,
        cs_m3: 6.10e20 * PER_CM3,
        alpha: 0.719,
        beta: 2.0,
    };

    /// Mobility at total dopant density `doping_m3`, m^2/(V s). At zero doping this is the
    /// formula's limit (mu_min1 + mu_max - mu_min2 when Pc = 0, mu_max - mu_min2 otherwise).
    pub fn mobility_m2_per_vs(&self, doping_m3: f64) -> f64 {
        if doping_m3 <= 0.0 {
            let first = if self.pc_m3 == 0.0 { self.mu_min1_m2_per_vs } else { 0.0 };
            return first + self.mu_max_m2_per_vs - self.mu_min2_m2_per_vs;
        }
        let low_doping_term = if self.pc_m3 == 0.0 {
            self.mu_min1_m2_per_vs
        } else {
            self.mu_min1_m2_per_vs * (-self.pc_m3 / doping_m3).exp()
        };
        low_doping_term
            + (self.mu_max_m2_per_vs - self.mu_min2_m2_per_vs) / (1.0 + (doping_m3 / self.cr_m3).powf(self.alpha))
            - self.mu_1_m2_per_vs / (1.0 + (self.cs_m3 / doping_m3).powf(self.beta))
    }
}

/// The doping and temperature dependence of Arora, Hauser and Roulston (1982):
/// mu(N, T) = mu_min + mu_0 / (1 + (N / N_ref)^alpha), with T_n = T / 300 K and
/// mu_min = A_min T_n^beta_min, mu_0 = A_0 T^beta_0 (T in kelvin, as published),
/// N_ref = A_ref T_n^beta_ref, alpha = A_alpha T_n^beta_alpha. Stored in SI (m^2/(V s), m^-3).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AroraParameters {
    /// A_min, m^2/(V s).
    pub mu_min_m2_per_vs: f64,
    pub mu_min_exponent: f64,
    /// A_0, m^2/(V s) K^-beta_0: the coefficient of T^beta_0 with T in kelvin.
    pub mu_0_coefficient_m2_per_vs: f64,
    pub mu_0_exponent: f64,
    /// A_ref, m^-3.
    pub reference_density_m3: f64,
    pub reference_density_exponent: f64,
    pub alpha: f64,
    pub alpha_exponent: f64,
}

impl AroraParameters {
    /// Electrons in silicon: 88 T_n^-0.57 + 7.4e8 T^-2.33 / (1 + (N / (1.26e17 T_n^2.4))^(0.88
    /// T_n^-0.146)) cm^2/(V s) (Arora et al. 1982; from memory).
    pub const SILICON_ELECTRONS: AroraParameters = AroraParameters {
        mu_min_m2_per_vs: 88.0 * CM2_PER_VS,
        mu_min_exponent: -0.57,
        mu_0_coefficient_m2_per_vs: 7.4e8 * CM2_PER_VS,
        mu_0_exponent: -2.33,
        reference_density_m3: 1.26e17 * PER_CM3,
        reference_density_exponent: 2.4,
        alpha: 0.88,
        alpha_exponent: -0.146,
    };

    /// Holes in silicon: 54.3 T_n^-0.57 + 1.36e8 T^-2.23 / (1 + (N / (2.35e17 T_n^2.4))^(0.88
    /// T_n^-0.146)) cm^2/(V s) (Arora et al. 1982; from memory).
    pub const SILICON_HOLES: AroraParameters = AroraParameters {
        mu_min_m2_per_vs: 54.3 * CM2_PER_VS,
        mu_min_exponent: -0.57,
        mu_0_coefficient_m2_per_vs: 1.36e8 * CM2_PER_VS,
        mu_0_exponent: -2.23,
        reference_density_m3: 2.35e17 * PER_CM3,
        reference_density_exponent: 2.4,
        alpha: 0.88,
        alpha_exponent: -0.146,
    };

    /// Mobility at total dopant density `doping_m3` (0 or more) and `temperature_k`,
    /// m^2/(V s).
    pub fn mobility_m2_per_vs(&self, doping_m3: f64, temperature_k: f64) -> f64 {
        let reduced = temperature_k / 300.0;
        let minimum = self.mu_min_m2_per_vs * reduced.powf(self.mu_min_exponent);
        let excess = self.mu_0_coefficient_m2_per_vs * temperature_k.powf(self.mu_0_exponent);
        let reference = self.reference_density_m3 * reduced.powf(self.reference_density_exponent);
        let alpha = self.alpha * reduced.powf(self.alpha_exponent);
        minimum + excess / (1.0 + (doping_m3.max(0.0) / reference).powf(alpha))
    }
}

/// ln Gamma(x) for real x > 0 (Lanczos approximation, g = 7, nine coefficients; relative
/// error near 1e-15), with the reflection formula for 0 < x < 1/2. Returns ln|Gamma(x)|
/// for negative non-integer x and +inf at the poles.
pub fn ln_gamma(x: f64) -> f64 {
    const LANCZOS_G: f64 = 7.0;
    // The published coefficients, digits as published (more than a double holds).
    #[allow(clippy::excessive_precision)]
    const COEFFICIENTS: [f64; 9] = [
        0.999_999_999_999_809_93,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_13,
        -176.615_029_162_140_59,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_571_6e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x <= 0.0 && x == x.floor() {
        return f64::INFINITY;
    }
    if x < 0.5 {
        // Gamma(x) Gamma(1 - x) = pi / sin(pi x).
        return (PI / (PI * x).sin().abs()).ln() - ln_gamma(1.0 - x);
    }
    let shifted = x - 1.0;
    let mut series = COEFFICIENTS[0];
    for (index, coefficient) in COEFFICIENTS.iter().enumerate().skip(1) {
        series += coefficient / (shifted + index as f64);
    }
    let t = shifted + LANCZOS_G + 0.5;
    0.5 * (2.0 * PI).ln() + (shifted + 0.5) * t.ln() - t + series.ln()
}

/// The Hall scattering factor r_H = `<tau^2>/<tau>^2` for a non-degenerate parabolic band and
/// tau ~ E^s: Gamma(2s + 5/2) Gamma(5/2) / Gamma(s + 5/2)^2 (Putley 1960). Acoustic
/// phonons s = -1/2 give 3 pi/8, ionized impurities s = 3/2 give 315 pi/512. Defined for
/// s > -5/4 (NaN below).
pub fn hall_scattering_factor(energy_exponent: f64) -> f64 {
    if energy_exponent.is_nan() || energy_exponent <= -1.25 {
        return f64::NAN;
    }
    (ln_gamma(2.0 * energy_exponent + 2.5) + ln_gamma(2.5) - 2.0 * ln_gamma(energy_exponent + 2.5)).exp()
}

#[cfg(test)]
mod tests {
    use super::*;

    const CM2: f64 = 1e-4; // cm^2/(V s) to m^2/(V s)
    const CM3: f64 = 1e6; // cm^-3 to m^-3

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        ((actual - expected) / expected).abs() <= relative
    }

    /// A check value printed to a limited number of digits agrees when the difference is
    /// within half a unit of its last printed digit.
    fn matches_printed(actual: f64, printed: f64, last_digit: f64) -> bool {
        (actual - printed).abs() <= 0.5 * last_digit * (1.0 + 1e-9)
    }

    // Matthiessen's rule 1/mu = sum 1/mu_i: 1400 and 700 give 466.667 (computed from it).
    #[test]
    fn matthiessen_combines_reciprocals() {
        assert!(close(
            matthiessen_m2_per_vs(&[1400.0 * CM2, 700.0 * CM2]),
            466.667 * CM2,
            1e-6
        ));
        assert_eq!(matthiessen_m2_per_vs(&[0.1, f64::INFINITY]), 0.1);
    }

    // Arora et al. (IEEE TED 29, 292, 1982) lattice law for electrons in Si,
    // 1448 (T/300)^-2.33 cm^2/Vs; values computed from it.
    #[test]
    fn lattice_power_law() {
        assert!(close(lattice_mobility_m2_per_vs(0.1448, 2.33, 300.0), 0.1448, 1e-15));
        let at_77 = lattice_mobility_m2_per_vs(0.1448, 2.33, 77.0);
        assert!(close(at_77, 0.1448 * (77.0f64 / 300.0).powf(-2.33), 1e-14));
        assert!(at_77 > 1.0); // above 10^4 cm^2/Vs at 77 K
    }

    // Practical forms of the ionized-impurity formulas (Chattopadhyay and Queisser, Rev. Mod.
    // Phys. 53, 745, 1981): mu = 3.28736e15 eps_r^2 T^1.5 / (N_I (m*/m0)^0.5 Z^2 L),
    // b = 1.29254e14 (m*/m0) eps_r T^2 / n', gamma = 1795.32 eps_r T / N_I^(1/3) (cm units);
    // the numerical prefactors were computed from the SI formulas with CODATA 2018 constants.
    #[test]
    fn prefactors_reduce_to_the_practical_forms() {
        let unit_medium = ScatteringMedium {
            effective_mass_ratio: 1.0,
            relative_permittivity: 1.0,
        };
        // At T = 1 K, N_I = 1 cm^-3, Z = 1: prefactor in cm^2/Vs.
        let prefactor_cm2 = unit_medium.impurity_prefactor_m2_per_vs(1.0 * CM3, 1.0, 1.0) / CM2;
        assert!(matches_printed(prefactor_cm2, 3.28736e15, 1e10));
        let b = unit_medium.brooks_herring_screening_parameter(1.0 * CM3, 1.0);
        assert!(matches_printed(b, 1.29254e14, 1e9));
    }

    // Si (m* 0.26, eps_r 11.7, 300 K, n' = N_I): 1e17 cm^-3: CW 8781.5, BH 9407.6 (b 353.87);
    // 1e18: CW 1237.2, BH 1749.2 cm^2/Vs; computed from the Brooks-Herring and
    // Conwell-Weisskopf formulas (review: Chattopadhyay and Queisser 1981).
    #[test]
    fn silicon_ionized_impurity_mobilities() {
        let si = ScatteringMedium::SILICON_ELECTRONS;
        let b = si.brooks_herring_screening_parameter(1e17 * CM3, 300.0);
        assert!(matches_printed(b, 353.87, 0.01));
        let cases = [(1e17, 8781.5, 9407.6), (1e18, 1237.2, 1749.2)];
        for (density_cm3, cw_cm2, bh_cm2) in cases {
            let cw = si.conwell_weisskopf_mobility_m2_per_vs(density_cm3 * CM3, 300.0, 1.0);
            let bh = si.brooks_herring_mobility_m2_per_vs(density_cm3 * CM3, density_cm3 * CM3, 300.0, 1.0);
            assert!(matches_printed(cw / CM2, cw_cm2, 0.1), "CW {density_cm3}: {}", cw / CM2);
            assert!(matches_printed(bh / CM2, bh_cm2, 0.1), "BH {density_cm3}: {}", bh / CM2);
        }
        // Doubly charged centres scatter four times as strongly at the same CW cut-off
        // density, up to the change of the logarithm (gamma halves).
        let single = si.conwell_weisskopf_mobility_m2_per_vs(1e23, 300.0, 1.0);
        let double = si.conwell_weisskopf_mobility_m2_per_vs(1e23, 300.0, 2.0);
        assert!(double < single / 4.0 * 1.6 && double > single / 4.0);
        assert_eq!(
            si.brooks_herring_mobility_m2_per_vs(0.0, 1e20, 300.0, 1.0),
            f64::INFINITY
        );
    }

    #[test]
    fn brooks_herring_logarithm_is_accurate_for_weak_screening_parameters() {
        // b -> 0: ln(1+b) - b/(1+b) -> b^2/2, so mu -> 2 prefactor / b^2.
        let si = ScatteringMedium::SILICON_ELECTRONS;
        let (density, temperature) = (1e25, 2.0);
        let b = si.brooks_herring_screening_parameter(density, temperature);
        assert!(b < 1e-3);
        let mu = si.brooks_herring_mobility_m2_per_vs(density, density, temperature, 1.0);
        let limit = si.impurity_prefactor_m2_per_vs(density, temperature, 1.0) * 2.0 / (b * b) / (1.0 - 4.0 * b / 3.0);
        assert!(close(mu, limit, 1e-5));
    }

    // Masetti, Severi and Solmi, IEEE TED 30, 764 (1983), Table I; As electrons / B holes at
    // N = 1e16, 1e17, 1e18 cm^-3: 1176.79/424.91, 727.05/319.10, 283.78/160.31 cm^2/Vs,
    // computed from their formula.
    #[test]
    fn masetti_matches_values_computed_from_table_one() {
        let cases = [(1e16, 1176.79, 424.91), (1e17, 727.05, 319.10), (1e18, 283.78, 160.31)];
        for (doping_cm3, electrons, holes) in cases {
            let mu_n = MasettiParameters::SILICON_ELECTRONS_ARSENIC.mobility_m2_per_vs(doping_cm3 * CM3);
            let mu_p = MasettiParameters::SILICON_HOLES_BORON.mobility_m2_per_vs(doping_cm3 * CM3);
            assert!(
                matches_printed(mu_n / CM2, electrons, 0.01),
                "{doping_cm3}: {}",
                mu_n / CM2
            );
            assert!(matches_printed(mu_p / CM2, holes, 0.01), "{doping_cm3}: {}", mu_p / CM2);
        }
    }

    #[test]
    fn masetti_phosphorus_decreases_with_doping_from_its_low_doping_limit() {
        let phosphorus = MasettiParameters::SILICON_ELECTRONS_PHOSPHORUS;
        // Low-doping limit mu_min1 + mu_max - mu_min2 = 1414 cm^2/Vs (Table I).
        assert!(close(phosphorus.mobility_m2_per_vs(0.0), 1414.0 * CM2, 1e-15));
        assert!(close(phosphorus.mobility_m2_per_vs(1e10 * CM3), 1414.0 * CM2, 1e-4));
        let mut previous = f64::INFINITY;
        for exponent in 13..21 {
            let mu = phosphorus.mobility_m2_per_vs(10f64.powi(exponent) * CM3);
            assert!(mu < previous);
            previous = mu;
        }
        // Holes at zero doping: mu_max - mu_min2 = 470.5 (Pc > 0 removes the first term).
        assert!(close(
            MasettiParameters::SILICON_HOLES_BORON.mobility_m2_per_vs(0.0),
            470.5 * CM2,
            1e-15
        ));
    }

    // Arora, Hauser and Roulston, IEEE TED 29, 292 (1982) (parameters from memory): electrons
    // at 300 K and 1e17 cm^-3, 88 + 1252.2 / (1 + (1e17 / 1.26e17)^0.88) = 777.3 cm^2/Vs, and
    // holes at 400 K and 1e16 cm^-3, 54.3 (4/3)^-0.57 + 1.36e8 400^-2.23 / (1 + (1e16 /
    // (2.35e17 (4/3)^2.4))^(0.88 (4/3)^-0.146)) = 249.5 cm^2/Vs; computed from the formula.
    #[test]
    fn arora_matches_values_computed_from_the_formula() {
        let electrons = AroraParameters::SILICON_ELECTRONS.mobility_m2_per_vs(1e17 * CM3, 300.0) / CM2;
        assert!((electrons - 777.3).abs() < 0.05, "{electrons}");
        let holes = AroraParameters::SILICON_HOLES.mobility_m2_per_vs(1e16 * CM3, 400.0) / CM2;
        let reduced: f64 = 400.0 / 300.0;
        let expected = 54.3 * reduced.powf(-0.57)
            + 1.36e8 * 400f64.powf(-2.23)
                / (1.0 + (1e16 / (2.35e17 * reduced.powf(2.4))).powf(0.88 * reduced.powf(-0.146)));
        assert!((holes - expected).abs() < 1e-9 * expected, "{holes} against {expected}");
        // Heavy doping leaves the minimum term: 88 cm^2/Vs at 300 K.
        let limit = AroraParameters::SILICON_ELECTRONS.mobility_m2_per_vs(1e24 * CM3, 300.0) / CM2;
        assert!((limit - 88.0).abs() < 0.5, "{limit}");
        // Negative doping counts as none.
        assert_eq!(
            AroraParameters::SILICON_ELECTRONS.mobility_m2_per_vs(-1.0, 300.0),
            AroraParameters::SILICON_ELECTRONS.mobility_m2_per_vs(0.0, 300.0)
        );
    }

    // Gamma at integers is a factorial, Gamma(1/2) = sqrt(pi) (standard identities).
    #[test]
    fn ln_gamma_matches_exact_values() {
        let mut factorial = 1.0f64;
        for n in 1..25 {
            if n > 1 {
                factorial *= (n - 1) as f64;
            }
            assert!(
                (ln_gamma(n as f64) - factorial.ln()).abs() < 1e-13 * factorial.ln().max(1.0),
                "{n}"
            );
        }
        assert!((ln_gamma(0.5) - PI.sqrt().ln()).abs() < 1e-14);
        // Gamma(-1/2) = -2 sqrt(pi): reflection returns ln|Gamma|.
        assert!((ln_gamma(-0.5) - (2.0 * PI.sqrt()).ln()).abs() < 1e-14);
        // Gamma(x + 1) = x Gamma(x) at non-integers.
        for x in [0.1, 0.7, 1.3, 2.5, 7.25, 31.6] {
            assert!((ln_gamma(x + 1.0) - ln_gamma(x) - f64::ln(x)).abs() < 1e-13 * ln_gamma(x + 1.0).abs().max(1.0));
        }
        assert_eq!(ln_gamma(0.0), f64::INFINITY);
    }

    // r_H = 3 pi/8 = 1.1780972 for acoustic phonons (s = -1/2) and 315 pi/512 = 1.9328158 for
    // ionized impurities (s = 3/2) (Putley, The Hall Effect and Related Phenomena, 1960).
    #[test]
    fn hall_factor_of_the_classic_scattering_mechanisms() {
        assert!(close(hall_scattering_factor(-0.5), 3.0 * PI / 8.0, 1e-13));
        assert!(close(hall_scattering_factor(1.5), 315.0 * PI / 512.0, 1e-13));
        assert!((hall_scattering_factor(-0.5) - 1.1780972).abs() < 1e-7);
        assert!((hall_scattering_factor(1.5) - 1.9328158).abs() < 1e-7);
        // Energy-independent relaxation time: r_H = 1 exactly in theory.
        assert!((hall_scattering_factor(0.0) - 1.0).abs() < 1e-14);
        assert!(hall_scattering_factor(-2.0).is_nan());
    }
}
