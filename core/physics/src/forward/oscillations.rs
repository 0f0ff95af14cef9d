//! Quantum corrections to the magnetoresistance: Shubnikov-de Haas oscillations of rho_xx
//! with Lifshitz-Kosevich damping, and the Hikami-Larkin-Nagaoka weak-localization
//! correction of the sheet conductance. Synthetic sweeps of both.
//!
//! # Shubnikov-de Haas oscillations
//!
//! A closed Fermi-surface orbit of extremal area A_F makes rho_xx oscillate periodically in
//! 1/B with the Onsager frequency F = (hbar / 2 pi e) A_F. In two dimensions a Fermi circle
//! holding n / g_s carriers per unit area in each of g_s degenerate spin states has
//! k_F^2 = 4 pi n / g_s, so A_F = pi k_F^2 = 4 pi^2 n / g_s and n = g_s e F / h, g_s the
//! degeneracy of the levels that the oscillation counts (2 when the spin splitting is not
//! resolved, 1 when it is) ([`sheet_density_from_frequency_m2`]).
//!
//! Each component of the oscillation is damped by the Lifshitz-Kosevich factors
//! (Lifshitz and Kosevich, Sov. Phys. JETP 2, 636, 1956; Shoenberg, Magnetic Oscillations in
//! Metals, Cambridge 1984):
//!
//! - thermal: R_T = X / sinh X, X = 2 pi^2 k_B T m* / (hbar e B) = [`LK_FIELD_PER_KELVIN`]
//!   (m*/m_0) T / B, with [`LK_FIELD_PER_KELVIN`] = 2 pi^2 k_B m_0 / (hbar e) = 14.693 T/K:
//!   the Fermi-Dirac smearing of the Landau levels at temperature T;
//! - Dingle: R_D = exp(-2 pi^2 k_B T_D m* / (hbar e B)), T_D = hbar / (2 pi k_B tau_q): the
//!   broadening of the levels by the quantum (single-particle) lifetime tau_q;
//! - spin: R_S = cos(pi g m* / (2 m_0)): the interference of the two spin-split sets of
//!   levels. It may be negative, which flips the phase; g = 0 gives 1, the factor left out.
//!
//! The model of rho_xx (first harmonic of each component; the higher harmonics carry the
//! squares of the damping factors and are left out) is
//!
//! rho_xx(B, T) = rho_bg(|B|) + rho_bg(0) sum_i a_i R_T,i R_D,i R_S,i cos(2 pi F_i / |B| + phi_i),
//!
//! with rho_bg(|B|) = c_0 + c_1 |B| + c_2 B^2 + ... a smooth classical background (even in
//! B, as a symmetrized sweep is). For a spin-degenerate two-dimensional electron gas the
//! Ando form, Delta rho / rho_0 = 4 R_T R_D cos(2 pi F / B - pi) (Isihara and Smrcka, J. Phys.
//! C 19, 6777, 1986; from memory), is a = 4, phi = -pi: minima of rho_xx at integer F/B,
//! even filling factors. A Berry phase pi (Dirac carriers) shifts phi by pi. At B = 0 the
//! oscillation is fully damped (R_T, R_D -> 0 faster than any power of B) and rho_xx = c_0.
//!
//! # Weak localization
//!
//! In a thin film (thickness below the phase-coherence length l_phi) the interference of
//! time-reversed paths changes the sheet conductance at low field by (Hikami, Larkin and
//! Nagaoka, Prog. Theor. Phys. 63, 707, 1980, in the form used for strong spin-orbit
//! coupling)
//!
//! d_sigma(B) = sigma(B) - sigma(0) = alpha (e^2 / 2 pi^2 hbar) [psi(1/2 + B_phi / B) - ln(B_phi / B)],
//!
//! B_phi = hbar / (4 e l_phi^2), psi the digamma function ([`mobilis_numerics::special`]). The bracket
//! is positive and grows like ln(B / B_phi) at B >> B_phi and like (B / B_phi)^2 / 24 at
//! B << B_phi. alpha = -1/2 per channel is weak antilocalization (conductance falls with
//! field), positive alpha weak localization. The function is even in B and zero at B = 0
//! ([`hln_correction_s`]). A classical magnetoconductance -sigma_0 mu^2 B^2 adds at higher
//! field; [`WeakLocalizationModel`] carries it as a B^2 coefficient.
//!
//! # Synthetic sweeps
//!
//! [`synthetic_sdh_sweep`] and [`synthetic_weak_localization_sweep`] evaluate rho_xx at the
//! given fields, in their order, and add Gaussian noise of standard deviation
//! `absolute_ohm + relative |rho_xx|` ([`SweepNoise`]) drawn in the order of the fields, so a
//! seed fixes every value.

use std::f64::consts::PI;

use super::tensor::SweepNoise;
use super::{require_finite, require_non_negative, require_positive, ForwardError};
use crate::constants::{BOLTZMANN_J_PER_K, ELECTRON_MASS_KG, ELEMENTARY_CHARGE_C, PLANCK_J_S, REDUCED_PLANCK_J_S};
use mobilis_numerics::noise::Rng;
use mobilis_numerics::special::digamma_half_shift_minus_ln;

/// 2 pi^2 k_B m_0 / (hbar e) in T/K: X = this x (m*/m_0) x T / B (14.69317 T/K).
pub const LK_FIELD_PER_KELVIN: f64 =
    2.0 * PI * PI * BOLTZMANN_J_PER_K * ELECTRON_MASS_KG / (REDUCED_PLANCK_J_S * ELEMENTARY_CHARGE_C);

/// e^2 / (2 pi^2 hbar) in S, the conductance unit of the HLN formula (1.2331471e-5 S).
pub const HLN_CONDUCTANCE_S: f64 = ELEMENTARY_CHARGE_C * ELEMENTARY_CHARGE_C / (2.0 * PI * PI * REDUCED_PLANCK_J_S);

/// The Lifshitz-Kosevich argument X = 2 pi^2 k_B T m* / (hbar e B) (no validation; |B| is
/// used, so X >= 0 for T >= 0).
pub fn thermal_damping_argument(temperature_k: f64, effective_mass_ratio: f64, field_t: f64) -> f64 {
    LK_FIELD_PER_KELVIN * effective_mass_ratio * temperature_k / field_t.abs()
}

/// R_T = X / sinh X, even in X, 1 at X = 0. Below |X| = 1e-4 the series 1 - X^2/6 + 7 X^4/360
/// avoids 0/0; above 700, where sinh overflows, 2 |X| exp(-|X|).
pub fn thermal_damping(x: f64) -> f64 {
    let x = x.abs();
    if x < 1e-4 {
        let square = x * x;
        1.0 - square / 6.0 + 7.0 * square * square / 360.0
    } else if x > 700.0 {
        2.0 * x * (-x).exp()
    } else {
        x / x.sinh()
    }
}

/// d ln R_T / dX = 1/X - coth X (0 at X = 0, -> -1 for large X), for analytic Jacobians.
pub fn thermal_damping_log_derivative(x: f64) -> f64 {
    let magnitude = x.abs();
    let value = if magnitude < 1e-4 {
        -magnitude / 3.0
    } else if magnitude > 20.0 {
        1.0 / magnitude - 1.0
    } else {
        1.0 / magnitude - 1.0 / magnitude.tanh()
    };
    value * x.signum()
}

/// R_T at temperature T, mass ratio m*/m_0 and field B.
pub fn thermal_damping_factor(temperature_k: f64, effective_mass_ratio: f64, field_t: f64) -> f64 {
    thermal_damping(thermal_damping_argument(temperature_k, effective_mass_ratio, field_t))
}

/// R_D = exp(-2 pi^2 k_B T_D m* / (hbar e |B|)); 0 at B = 0 for T_D m* > 0.
pub fn dingle_damping(dingle_temperature_k: f64, effective_mass_ratio: f64, field_t: f64) -> f64 {
    (-LK_FIELD_PER_KELVIN * effective_mass_ratio * dingle_temperature_k / field_t.abs()).exp()
}

/// R_S = cos(pi g m* / (2 m_0)); 1 for g = 0.
pub fn spin_damping(g_factor: f64, effective_mass_ratio: f64) -> f64 {
    (0.5 * PI * g_factor * effective_mass_ratio).cos()
}

/// T_D = hbar / (2 pi k_B tau_q), K.
pub fn dingle_temperature_k(quantum_lifetime_s: f64) -> f64 {
    REDUCED_PLANCK_J_S / (2.0 * PI * BOLTZMANN_J_PER_K * quantum_lifetime_s)
}

/// tau_q = hbar / (2 pi k_B T_D), s (the same relation solved for tau_q).
pub fn quantum_lifetime_s(dingle_temperature_k: f64) -> f64 {
    REDUCED_PLANCK_J_S / (2.0 * PI * BOLTZMANN_J_PER_K * dingle_temperature_k)
}

/// n = g_s e F / h, m^-2: the sheet density of a 2D Fermi circle of Onsager frequency F.
pub fn sheet_density_from_frequency_m2(frequency_t: f64, spin_degeneracy: f64) -> f64 {
    spin_degeneracy * ELEMENTARY_CHARGE_C * frequency_t / PLANCK_J_S
}

/// F = n h / (g_s e), T: the inverse of [`sheet_density_from_frequency_m2`].
pub fn frequency_from_sheet_density_t(sheet_density_m2: f64, spin_degeneracy: f64) -> f64 {
    sheet_density_m2 * PLANCK_J_S / (spin_degeneracy * ELEMENTARY_CHARGE_C)
}

/// One oscillation component: a Fermi-surface orbit with its frequency, mass and damping.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OscillationComponent {
    /// Onsager frequency F, T.
    pub frequency_t: f64,
    /// m*/m_0 (cyclotron mass over the free-electron mass).
    pub effective_mass_ratio: f64,
    /// T_D, K (0 for no level broadening).
    pub dingle_temperature_k: f64,
    /// a: Delta rho / rho_bg(0) before damping (4 for a 2D electron gas in the Ando form).
    pub amplitude: f64,
    /// phi of cos(2 pi F / B + phi), rad (-pi: minima at integer F / B).
    pub phase_rad: f64,
    /// The g factor of the spin factor R_S; 0 leaves R_S out (R_S = 1).
    pub g_factor: f64,
}

impl OscillationComponent {
    /// A spin-degenerate 2D electron gas in the Ando form: a = 4, phi = -pi, g = 0.
    pub fn two_dimensional(frequency_t: f64, effective_mass_ratio: f64, dingle_temperature_k: f64) -> Self {
        OscillationComponent {
            frequency_t,
            effective_mass_ratio,
            dingle_temperature_k,
            amplitude: 4.0,
            phase_rad: -PI,
            g_factor: 0.0,
        }
    }

    /// Frequency and mass finite and positive, T_D and the amplitude finite and not
    /// negative, phase and g finite.
    pub fn validate(&self) -> Result<(), ForwardError> {
        require_positive("frequency_t", self.frequency_t)?;
        require_positive("effective_mass_ratio", self.effective_mass_ratio)?;
        require_non_negative("dingle_temperature_k", self.dingle_temperature_k)?;
        require_non_negative("amplitude", self.amplitude)?;
        require_finite("phase_rad", self.phase_rad)?;
        require_finite("g_factor", self.g_factor)?;
        Ok(())
    }

    /// a R_T R_D R_S at temperature T and field B (0 at B = 0).
    pub fn envelope(&self, temperature_k: f64, field_t: f64) -> f64 {
        if field_t == 0.0 {
            return 0.0;
        }
        self.amplitude
            * thermal_damping_factor(temperature_k, self.effective_mass_ratio, field_t)
            * dingle_damping(self.dingle_temperature_k, self.effective_mass_ratio, field_t)
            * spin_damping(self.g_factor, self.effective_mass_ratio)
    }

    /// The relative oscillation a R_T R_D R_S cos(2 pi F / |B| + phi) (0 at B = 0).
    pub fn relative_oscillation(&self, temperature_k: f64, field_t: f64) -> f64 {
        if field_t == 0.0 {
            return 0.0;
        }
        let envelope = self.envelope(temperature_k, field_t);
        envelope * (2.0 * PI * self.frequency_t / field_t.abs() + self.phase_rad).cos()
    }
}

/// rho_xx(B, T) of a smooth background with Shubnikov-de Haas oscillations (see the module
/// documentation).
#[derive(Debug, Clone, PartialEq)]
pub struct SdhModel {
    /// c_0, c_1, c_2, ... of rho_bg(|B|) = sum c_k |B|^k, ohm per square (per T^k).
    pub background_ohm_sq: Vec<f64>,
    pub components: Vec<OscillationComponent>,
}

impl SdhModel {
    /// At least c_0, which must be positive (the zero-field sheet resistance), every
    /// coefficient finite, every component valid.
    pub fn validate(&self) -> Result<(), ForwardError> {
        let Some(first) = self.background_ohm_sq.first() else {
            return Err(ForwardError::InvalidParameter {
                name: "background_ohm_sq",
                value: 0.0,
                requirement: "give at least the zero-field sheet resistance c_0",
            });
        };
        require_positive("background_ohm_sq[0]", *first)?;
        for coefficient in &self.background_ohm_sq {
            require_finite("background_ohm_sq", *coefficient)?;
        }
        self.components.iter().try_for_each(OscillationComponent::validate)
    }

    /// rho_bg(|B|), ohm per square.
    pub fn background_ohm_sq(&self, field_t: f64) -> f64 {
        let magnitude = field_t.abs();
        self.background_ohm_sq
            .iter()
            .rev()
            .fold(0.0, |acc, coefficient| acc * magnitude + coefficient)
    }

    /// rho_bg(0) sum_i a_i R_T R_D R_S cos(2 pi F_i / |B| + phi_i), ohm per square.
    pub fn oscillatory_part_ohm_sq(&self, field_t: f64, temperature_k: f64) -> f64 {
        let relative: f64 = self
            .components
            .iter()
            .map(|component| component.relative_oscillation(temperature_k, field_t))
            .sum();
        self.background_ohm_sq.first().copied().unwrap_or(0.0) * relative
    }

    /// rho_xx(B, T), ohm per square (no validation).
    pub fn rho_xx_ohm_sq(&self, field_t: f64, temperature_k: f64) -> f64 {
        self.background_ohm_sq(field_t) + self.oscillatory_part_ohm_sq(field_t, temperature_k)
    }
}

/// rho_xx of `model` at `temperature_k` and each of `fields_t`, in their order, with
/// Gaussian noise of standard deviation `absolute_ohm + relative |rho_xx|`.
pub fn synthetic_sdh_sweep(
    model: &SdhModel,
    temperature_k: f64,
    fields_t: &[f64],
    noise: &SweepNoise,
    rng: &mut Rng,
) -> Result<Vec<f64>, ForwardError> {
    model.validate()?;
    require_non_negative("temperature_k", temperature_k)?;
    require_non_negative("noise.absolute_ohm", noise.absolute_ohm)?;
    require_non_negative("noise.relative", noise.relative)?;
    fields_t
        .iter()
        .map(|&field| {
            require_finite("fields_t", field)?;
            let rho = model.rho_xx_ohm_sq(field, temperature_k);
            let sd = noise.absolute_ohm + noise.relative * rho.abs();
            Ok(rho + sd * rng.standard_normal())
        })
        .collect()
}

/// B_phi = hbar / (4 e l_phi^2), T.
pub fn phase_coherence_field_t(phase_coherence_length_m: f64) -> f64 {
    REDUCED_PLANCK_J_S / (4.0 * ELEMENTARY_CHARGE_C * phase_coherence_length_m * phase_coherence_length_m)
}

/// l_phi = sqrt(hbar / (4 e B_phi)), m.
pub fn phase_coherence_length_m(phase_coherence_field_t: f64) -> f64 {
    (REDUCED_PLANCK_J_S / (4.0 * ELEMENTARY_CHARGE_C * phase_coherence_field_t)).sqrt()
}

/// The HLN bracket psi(1/2 + B_phi / |B|) - ln(B_phi / |B|), 0 at B = 0 (its limit).
pub fn hln_bracket(phase_coherence_field_t: f64, field_t: f64) -> f64 {
    if field_t == 0.0 {
        return 0.0;
    }
    digamma_half_shift_minus_ln(phase_coherence_field_t / field_t.abs())
}

/// d_sigma(B) = alpha e^2 / (2 pi^2 hbar) [psi(1/2 + B_phi/|B|) - ln(B_phi/|B|)], S.
pub fn hln_correction_s(field_t: f64, alpha: f64, phase_coherence_field_t: f64) -> f64 {
    alpha * HLN_CONDUCTANCE_S * hln_bracket(phase_coherence_field_t, field_t)
}

/// The low-field sheet conductance of a thin film: sigma(B) = sigma_0 + d_sigma_HLN(B) +
/// beta B^2.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WeakLocalizationModel {
    /// Zero-field sheet conductance, S.
    pub sigma_0_s: f64,
    /// HLN prefactor (-1/2 per channel for antilocalization, positive for localization).
    pub alpha: f64,
    pub phase_coherence_length_m: f64,
    /// Classical term beta, S/T^2 (negative: -sigma_0 mu^2 for one carrier).
    pub classical_s_per_t2: f64,
}

impl WeakLocalizationModel {
    pub fn validate(&self) -> Result<(), ForwardError> {
        require_positive("sigma_0_s", self.sigma_0_s)?;
        require_finite("alpha", self.alpha)?;
        require_positive("phase_coherence_length_m", self.phase_coherence_length_m)?;
        require_finite("classical_s_per_t2", self.classical_s_per_t2)?;
        Ok(())
    }

    /// sigma(B), S (no validation).
    pub fn conductance_s(&self, field_t: f64) -> f64 {
        let b_phi = phase_coherence_field_t(self.phase_coherence_length_m);
        self.sigma_0_s + hln_correction_s(field_t, self.alpha, b_phi) + self.classical_s_per_t2 * field_t * field_t
    }
}

/// rho_xx = 1 / sigma(B) of `model` at each of `fields_t` (the Hall angle of a weakly
/// localized film is small, so rho_xx = 1 / sigma_xx to second order in it), with Gaussian
/// noise of standard deviation `absolute_ohm + relative |rho_xx|`. Fails where sigma(B) is
/// not positive (a classical term too large for the field range).
#[allow(
    clippy::neg_cmp_op_on_partial_ord,
    reason = "`!(x > y)` refuses NaN too, in one test"
)]
pub fn synthetic_weak_localization_sweep(
    model: &WeakLocalizationModel,
    fields_t: &[f64],
    noise: &SweepNoise,
    rng: &mut Rng,
) -> Result<Vec<f64>, ForwardError> {
    model.validate()?;
    require_non_negative("noise.absolute_ohm", noise.absolute_ohm)?;
    require_non_negative("noise.relative", noise.relative)?;
    fields_t
        .iter()
        .map(|&field| {
            require_finite("fields_t", field)?;
            let sigma = model.conductance_s(field);
            if !(sigma > 0.0) {
                return Err(ForwardError::InvalidParameter {
                    name: "classical_s_per_t2",
                    value: model.classical_s_per_t2,
                    requirement:
                        "keep sigma(B) positive over the field range (a smaller classical term or lower fields)",
                });
            }
            let rho = 1.0 / sigma;
            let sd = noise.absolute_ohm + noise.relative * rho;
            Ok(rho + sd * rng.standard_normal())
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        ((actual - expected) / expected).abs() <= relative
    }

    // Computed from the Lifshitz-Kosevich and Dingle formulas (Lifshitz and Kosevich, Sov.
    // Phys. JETP 2, 636, 1956; R. B. Dingle, Proc. R. Soc. A 211, 517, 1952; Shoenberg 1984)
    // with the CODATA 2018 constants.
    #[test]
    fn oscillations_lifshitz_kosevich_check_values() {
        assert!(close(LK_FIELD_PER_KELVIN, 14.693_17, 1e-6), "{LK_FIELD_PER_KELVIN}");
        let x = thermal_damping_argument(4.2, 0.067, 2.0);
        assert!(close(x, 2.067_329, 1e-6), "{x}");
        assert!(close(thermal_damping(x), 0.531_641, 1e-6), "{}", thermal_damping(x));
        let x = thermal_damping_argument(2.0, 0.067, 5.0);
        assert!(close(x, 0.393_777, 1e-6), "{x}");
        assert!(close(thermal_damping_factor(2.0, 0.067, 5.0), 0.974_617, 1e-6));
        // Printed to six digits: half a unit of the last is 1.3e-6 of the value.
        assert!(close(dingle_damping(5.0, 0.067, 5.0), 0.373_648, 1.5e-6));
        // The field enters as |B|.
        assert_eq!(dingle_damping(5.0, 0.067, -5.0), dingle_damping(5.0, 0.067, 5.0));
    }

    // Computed from T_D = hbar / (2 pi k_B tau_q) (Dingle 1952: tau_q = 1 ps gives
    // T_D = 1.21566 K) and from Onsager's relation with n = g_s e F / h (L. Onsager, Phil.
    // Mag. 43, 1006, 1952: F = 10 T gives 4.835978e11 cm^-2 for g_s = 2 and 2.41799e11 cm^-2
    // for g_s = 1), both with the CODATA 2018 constants.
    #[test]
    fn oscillations_dingle_lifetime_and_onsager_density_check_values() {
        assert!(
            close(dingle_temperature_k(1e-12), 1.215_66, 1e-5),
            "{}",
            dingle_temperature_k(1e-12)
        );
        assert!(close(quantum_lifetime_s(dingle_temperature_k(3.3e-13)), 3.3e-13, 1e-14));
        let cm2 = 1e4;
        assert!(close(
            sheet_density_from_frequency_m2(10.0, 2.0) / cm2,
            4.835_978e11,
            1e-6
        ));
        assert!(close(
            sheet_density_from_frequency_m2(10.0, 1.0) / cm2,
            2.417_99e11,
            1e-5
        ));
        let density = 7.3e15;
        let round_trip = sheet_density_from_frequency_m2(frequency_from_sheet_density_t(density, 2.0), 2.0);
        assert!(close(round_trip, density, 1e-14));
    }

    // X / sinh X: 1 at 0, the series and the overflow branch join the direct form, and
    // d ln R_T / dX agrees with a central difference (calculus, no outside values).
    #[test]
    fn oscillations_thermal_damping_branches_join() {
        assert_eq!(thermal_damping(0.0), 1.0);
        for x in [0.99e-4, 1.01e-4] {
            assert!(close(thermal_damping(x), x / x.sinh(), 1e-15), "{x}");
        }
        let above = thermal_damping(700.5);
        let expected = 700.5 * 2.0 / (700.5f64.exp() + (-700.5f64).exp());
        assert!(close(above, expected, 1e-12), "{above} {expected}");
        assert!(thermal_damping(1e4) >= 0.0 && thermal_damping(1e4) < 1e-300);
        assert_eq!(thermal_damping(-1.3), thermal_damping(1.3));
        for x in [1e-6f64, 0.3, 2.0, 19.9, 20.1, 80.0] {
            let h = 1e-6 * x.max(1e-2);
            let numeric = (thermal_damping(x + h).ln() - thermal_damping(x - h).ln()) / (2.0 * h);
            let analytic = thermal_damping_log_derivative(x);
            assert!((numeric - analytic).abs() < 1e-6, "{x}: {numeric} {analytic}");
        }
    }

    // Computed from the HLN formula (Hikami, Larkin and Nagaoka, Prog. Theor. Phys. 63, 707,
    // 1980) with the CODATA 2018 constants: e^2/(2 pi^2 hbar) = 1.2331471e-5 S;
    // l_phi = 100 nm -> B_phi = 0.01645530 T; alpha = -1/2: d_sigma(0.1 T) = -2.95829e-6 S,
    // d_sigma(1 T) = -1.37039e-5 S; alpha = 1, l_phi = 1 um: d_sigma(0.1 T) = +5.49278e-5 S.
    #[test]
    fn oscillations_hln_check_values() {
        assert!(close(HLN_CONDUCTANCE_S, 1.233_147_1e-5, 1e-6), "{HLN_CONDUCTANCE_S}");
        let b_phi = phase_coherence_field_t(100e-9);
        assert!(close(b_phi, 0.016_455_30, 1e-6), "{b_phi}");
        assert!(close(phase_coherence_length_m(b_phi), 100e-9, 1e-14));
        let at_01 = hln_correction_s(0.1, -0.5, b_phi);
        assert!(close(at_01, -2.958_29e-6, 1e-5), "{at_01}");
        let at_1 = hln_correction_s(1.0, -0.5, b_phi);
        assert!(close(at_1, -1.370_39e-5, 1e-5), "{at_1}");
        assert_eq!(hln_correction_s(-1.0, -0.5, b_phi), at_1);
        let long = hln_correction_s(0.1, 1.0, phase_coherence_field_t(1e-6));
        assert!(close(long, 5.492_78e-5, 1e-5), "{long}");
        assert_eq!(hln_correction_s(0.0, 1.0, b_phi), 0.0);
        // Low-field limit (B << B_phi): alpha G (B / B_phi)^2 / 24 (DLMF 5.11.8).
        let tiny = 1e-5;
        let limit = -0.5 * HLN_CONDUCTANCE_S * (tiny / b_phi).powi(2) / 24.0;
        assert!(close(hln_correction_s(tiny, -0.5, b_phi), limit, 1e-5));
    }

    // The sweep is the model plus noise of the stated size, reproducible from its seed, and
    // rho_xx(0) is the background's c_0 (the oscillation is damped away at zero field).
    #[test]
    fn oscillations_synthetic_sdh_sweep_is_the_model_plus_its_noise() {
        let model = SdhModel {
            background_ohm_sq: vec![100.0, 0.0, 2.0],
            components: vec![OscillationComponent::two_dimensional(20.0, 0.067, 1.0)],
        };
        let fields: Vec<f64> = (0..=900).map(|k| k as f64 * 0.01).collect();
        let clean = synthetic_sdh_sweep(&model, 2.0, &fields, &SweepNoise::NONE, &mut Rng::seeded(1)).unwrap();
        assert_eq!(clean[0], 100.0);
        for (field, rho) in fields.iter().zip(&clean) {
            assert_eq!(*rho, model.rho_xx_ohm_sq(*field, 2.0));
        }
        // At 9 T, F/B = 2.22: the cosine and the damping factors by hand.
        let expected = 100.0
            + 2.0 * 81.0
            + 100.0
                * 4.0
                * thermal_damping_factor(2.0, 0.067, 9.0)
                * dingle_damping(1.0, 0.067, 9.0)
                * (2.0 * PI * 20.0 / 9.0 - PI).cos();
        assert!(close(clean[900], expected, 1e-14));
        let noise = SweepNoise {
            absolute_ohm: 0.5,
            relative: 0.0,
        };
        let first = synthetic_sdh_sweep(&model, 2.0, &fields, &noise, &mut Rng::seeded(9)).unwrap();
        let again = synthetic_sdh_sweep(&model, 2.0, &fields, &noise, &mut Rng::seeded(9)).unwrap();
        assert_eq!(first, again);
        let deviations: Vec<f64> = first.iter().zip(&clean).map(|(a, b)| a - b).collect();
        let rms = (deviations.iter().map(|d| d * d).sum::<f64>() / deviations.len() as f64).sqrt();
        assert!((rms - 0.5).abs() < 0.05, "{rms}");
        let bad = SdhModel {
            background_ohm_sq: vec![],
            components: vec![],
        };
        assert!(synthetic_sdh_sweep(&bad, 2.0, &fields, &noise, &mut Rng::seeded(1)).is_err());
    }

    // A negative spin factor flips the phase; g m* = 1 nulls the first harmonic (the
    // spin-zero condition of R_S = cos(pi g m* / 2), Shoenberg 1984).
    #[test]
    fn oscillations_spin_factor_flips_and_nulls() {
        assert_eq!(spin_damping(0.0, 0.3), 1.0);
        assert!((spin_damping(4.0, 0.5) + 1.0).abs() < 1e-15);
        assert!(spin_damping(2.0, 0.5).abs() < 1e-15);
        let mut component = OscillationComponent::two_dimensional(15.0, 0.5, 0.0);
        component.g_factor = 4.0; // cos(pi) = -1
        let plain = OscillationComponent::two_dimensional(15.0, 0.5, 0.0);
        let flipped = component.relative_oscillation(1.0, 3.3);
        assert!(close(flipped, -plain.relative_oscillation(1.0, 3.3), 1e-14));
    }

    // The weak-localization sweep inverts sigma(B) of the model, is even in B, and refuses a
    // classical term that makes sigma negative.
    #[test]
    fn oscillations_synthetic_weak_localization_sweep() {
        let model = WeakLocalizationModel {
            sigma_0_s: 1e-3,
            alpha: -0.5,
            phase_coherence_length_m: 200e-9,
            classical_s_per_t2: -1e-6,
        };
        let fields = [-0.5, -0.1, 0.0, 0.1, 0.5];
        let rho = synthetic_weak_localization_sweep(&model, &fields, &SweepNoise::NONE, &mut Rng::seeded(3)).unwrap();
        assert_eq!(rho[2], 1000.0);
        assert_eq!(rho[0], rho[4]);
        assert_eq!(rho[1], rho[3]);
        let expected = 1.0 / (1e-3 + hln_correction_s(0.5, -0.5, phase_coherence_field_t(200e-9)) - 1e-6 * 0.25);
        assert!(close(rho[4], expected, 1e-15));
        let broken = WeakLocalizationModel {
            classical_s_per_t2: -1.0,
            ..model
        };
        assert!(synthetic_weak_localization_sweep(&broken, &fields, &SweepNoise::NONE, &mut Rng::seeded(3)).is_err());
    }
}
