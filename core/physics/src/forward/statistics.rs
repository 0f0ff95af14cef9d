//! Carrier statistics of a doped, non-degenerate semiconductor: band edges, the
//! charge-neutrality condition and its closed-form freeze-out limit.
//!
//! Everything is in SI densities (m^-3) and energies in eV. Carriers obey Boltzmann
//! statistics (the Fermi level stays a few kT inside the gap), and each dopant species has
//! one level with degeneracy g:
//!
//! - n = Nc exp((E_F - E_c)/kT), p = Nv exp((E_v - E_F)/kT), Nc and Nv scaling as T^1.5;
//! - N_D+ = N_D / (1 + g_D exp((E_F - E_c + E_D)/kT)) for donors E_D below E_c;
//! - N_A- = N_A / (1 + g_A exp((E_v + E_A - E_F)/kT)) for acceptors E_A above E_v;
//! - neutrality: p + N_D+ = n + N_A-.
//!
//! [`solve_charge_neutrality`] solves the full condition for the Fermi level. For an n-type
//! crystal with holes and acceptor occupancy negligible it reduces to the compensated
//! single-donor equation (Blakemore, Semiconductor Statistics, 1962; Look, Electrical
//! Characterization of GaAs Materials and Devices, 1989)
//!
//! n (n + N_A) / (N_D - N_A - n) = (Nc / g_D) exp(-E_D / kT),
//!
//! whose root [`compensated_donor_root_m3`] gives in closed form; the freeze-out fits use it.

use super::{require_finite, require_non_negative, require_positive, ForwardError};
use crate::constants::BOLTZMANN_EV_PER_K;

/// Degeneracy of a shallow donor level (spin), the usual default.
pub const DONOR_DEGENERACY_DEFAULT: f64 = 2.0;
/// Degeneracy of a shallow acceptor level (spin times the two degenerate valence bands of
/// cubic semiconductors), the usual default.
pub const ACCEPTOR_DEGENERACY_DEFAULT: f64 = 4.0;

/// The reference temperature of the effective densities of states, K.
pub const DOS_REFERENCE_TEMPERATURE_K: f64 = 300.0;

/// (T / 300 K)^1.5, written with a square root (correctly rounded by IEEE-754) rather than
/// `powf`, so that the demo data do not depend on the platform's `pow`.
fn dos_temperature_scale(temperature_k: f64) -> f64 {
    let ratio = temperature_k / DOS_REFERENCE_TEMPERATURE_K;
    ratio * ratio.sqrt()
}

/// Band-edge description of a semiconductor: effective densities of states at 300 K (scaled
/// as T^1.5, parabolic bands with temperature-independent masses) and a band gap following
/// Varshni's relation Eg(T) = Eg(0) - alpha T^2 / (T + beta).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BandModel {
    /// Conduction-band effective density of states at 300 K, m^-3.
    pub conduction_dos_300k_m3: f64,
    /// Valence-band effective density of states at 300 K, m^-3.
    pub valence_dos_300k_m3: f64,
    /// Band gap at 0 K, eV.
    pub band_gap_0k_ev: f64,
    /// Varshni alpha, eV/K.
    pub varshni_alpha_ev_per_k: f64,
    /// Varshni beta, K.
    pub varshni_beta_k: f64,
}

impl BandModel {
    /// Silicon from Levinshtein, Rumyantsev and Shur (Handbook Series on Semiconductor
    /// Parameters, vol. 1): Nc = 6.2e15 T^1.5 cm^-3, Nv = 3.5e15 T^1.5 cm^-3,
    /// Eg = 1.17 - 4.73e-4 T^2 / (T + 636) eV.
    pub fn silicon() -> Self {
        // 6.2e15 cm^-3 K^-1.5 = 6.2e21 m^-3 K^-1.5, evaluated at the 300 K reference.
        let reference_scale = DOS_REFERENCE_TEMPERATURE_K * DOS_REFERENCE_TEMPERATURE_K.sqrt();
        BandModel {
            conduction_dos_300k_m3: 6.2e21 * reference_scale,
            valence_dos_300k_m3: 3.5e21 * reference_scale,
            band_gap_0k_ev: 1.17,
            varshni_alpha_ev_per_k: 4.73e-4,
            varshni_beta_k: 636.0,
        }
    }

    /// The same bands with another conduction-band density of states at 300 K (handbooks
    /// differ by tens of percent; the freeze-out fit lets the user choose).
    pub fn with_conduction_dos_300k_m3(self, conduction_dos_300k_m3: f64) -> Self {
        BandModel {
            conduction_dos_300k_m3,
            ..self
        }
    }

    /// Conduction-band effective density of states at `temperature_k`, m^-3.
    pub fn conduction_dos_m3(&self, temperature_k: f64) -> f64 {
        self.conduction_dos_300k_m3 * dos_temperature_scale(temperature_k)
    }

    /// Valence-band effective density of states at `temperature_k`, m^-3.
    pub fn valence_dos_m3(&self, temperature_k: f64) -> f64 {
        self.valence_dos_300k_m3 * dos_temperature_scale(temperature_k)
    }

    /// Band gap at `temperature_k` (Varshni), eV.
    pub fn band_gap_ev(&self, temperature_k: f64) -> f64 {
        self.band_gap_0k_ev
            - self.varshni_alpha_ev_per_k * temperature_k * temperature_k / (temperature_k + self.varshni_beta_k)
    }

    /// Intrinsic carrier density n_i = sqrt(Nc Nv) exp(-Eg / 2kT), m^-3.
    pub fn intrinsic_density_m3(&self, temperature_k: f64) -> f64 {
        let thermal_ev = BOLTZMANN_EV_PER_K * temperature_k;
        (self.conduction_dos_m3(temperature_k) * self.valence_dos_m3(temperature_k)).sqrt()
            * (-self.band_gap_ev(temperature_k) / (2.0 * thermal_ev)).exp()
    }

    fn validate(&self) -> Result<(), ForwardError> {
        require_positive("conduction_dos_300k_m3", self.conduction_dos_300k_m3)?;
        require_positive("valence_dos_300k_m3", self.valence_dos_300k_m3)?;
        require_finite("band_gap_0k_ev", self.band_gap_0k_ev)?;
        require_finite("varshni_alpha_ev_per_k", self.varshni_alpha_ev_per_k)?;
        require_non_negative("varshni_beta_k", self.varshni_beta_k)?;
        Ok(())
    }
}

/// One donor and one acceptor species: densities, ionization energies and degeneracies.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dopants {
    /// Donor density N_D, m^-3.
    pub donor_density_m3: f64,
    /// Acceptor density N_A, m^-3.
    pub acceptor_density_m3: f64,
    /// Donor level below the conduction-band edge, eV.
    pub donor_ionization_ev: f64,
    /// Acceptor level above the valence-band edge, eV.
    pub acceptor_ionization_ev: f64,
    /// Donor degeneracy g_D (default 2).
    pub donor_degeneracy: f64,
    /// Acceptor degeneracy g_A (default 4).
    pub acceptor_degeneracy: f64,
}

impl Dopants {
    /// Dopants with the default degeneracies g_D = 2 and g_A = 4.
    pub fn new(
        donor_density_m3: f64,
        acceptor_density_m3: f64,
        donor_ionization_ev: f64,
        acceptor_ionization_ev: f64,
    ) -> Self {
        Dopants {
            donor_density_m3,
            acceptor_density_m3,
            donor_ionization_ev,
            acceptor_ionization_ev,
            donor_degeneracy: DONOR_DEGENERACY_DEFAULT,
            acceptor_degeneracy: ACCEPTOR_DEGENERACY_DEFAULT,
        }
    }

    /// Undoped (intrinsic) material.
    pub fn none() -> Self {
        Dopants::new(0.0, 0.0, 0.0, 0.0)
    }

    fn validate(&self) -> Result<(), ForwardError> {
        require_non_negative("donor_density_m3", self.donor_density_m3)?;
        require_non_negative("acceptor_density_m3", self.acceptor_density_m3)?;
        require_non_negative("donor_ionization_ev", self.donor_ionization_ev)?;
        require_non_negative("acceptor_ionization_ev", self.acceptor_ionization_ev)?;
        require_positive("donor_degeneracy", self.donor_degeneracy)?;
        require_positive("acceptor_degeneracy", self.acceptor_degeneracy)?;
        Ok(())
    }
}

/// The thermal-equilibrium state that satisfies charge neutrality.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Equilibrium {
    pub temperature_k: f64,
    /// E_c - E_F, eV (positive while the Fermi level is in the gap).
    pub fermi_level_below_conduction_ev: f64,
    /// Free electron density n, m^-3.
    pub electron_density_m3: f64,
    /// Free hole density p, m^-3.
    pub hole_density_m3: f64,
    /// N_D+, m^-3.
    pub ionized_donor_density_m3: f64,
    /// N_A-, m^-3.
    pub ionized_acceptor_density_m3: f64,
    /// N_D+ / N_D: the probability that a donor level is empty at this Fermi level
    /// (defined even when N_D = 0).
    pub ionized_donor_fraction: f64,
    /// N_A- / N_A: the probability that an acceptor level is filled at this Fermi level.
    pub ionized_acceptor_fraction: f64,
    /// kT times the derivative of the free and bound mobile charge with respect to the
    /// Fermi level: n + p + N_D+ (1 - N_D+/N_D) + N_A- (1 - N_A-/N_A), m^-3. This is the
    /// density that screens an ionized impurity (the n' of Brooks-Herring); for a
    /// compensated n-type crystal it is Brooks' n + (n + N_A)(N_D - N_A - n)/N_D.
    pub screening_density_m3: f64,
}

impl Equilibrium {
    /// Density of charged impurity centres N_D+ + N_A-, m^-3 (what ionized-impurity
    /// scattering sees).
    pub fn ionized_impurity_density_m3(&self) -> f64 {
        self.ionized_donor_density_m3 + self.ionized_acceptor_density_m3
    }
}

/// ln(1 + e^z) without overflow or loss of precision.
fn softplus(z: f64) -> f64 {
    z.max(0.0) + (-z.abs()).exp().ln_1p()
}

/// ln(e^a + e^b), accepting -inf for an absent term.
fn log_sum_exp(a: f64, b: f64) -> f64 {
    let largest = a.max(b);
    if largest == f64::NEG_INFINITY {
        return f64::NEG_INFINITY;
    }
    largest + (-(a - b).abs()).exp().ln_1p()
}

/// The logarithms of the four charged densities at reduced Fermi level
/// x = (E_F - E_c) / kT, all in ln(m^-3).
struct ReducedProblem {
    ln_conduction_dos: f64,
    ln_valence_dos: f64,
    ln_donor_density: f64,
    ln_acceptor_density: f64,
    ln_donor_degeneracy: f64,
    ln_acceptor_degeneracy: f64,
    reduced_gap: f64,
    reduced_donor_energy: f64,
    reduced_acceptor_energy: f64,
}

impl ReducedProblem {
    fn ln_electrons(&self, x: f64) -> f64 {
        self.ln_conduction_dos + x
    }
    fn ln_holes(&self, x: f64) -> f64 {
        self.ln_valence_dos - x - self.reduced_gap
    }
    fn ln_ionized_donors(&self, x: f64) -> f64 {
        self.ln_donor_density - softplus(self.ln_donor_degeneracy + x + self.reduced_donor_energy)
    }
    fn ln_ionized_acceptors(&self, x: f64) -> f64 {
        self.ln_acceptor_density
            - softplus(self.ln_acceptor_degeneracy - self.reduced_gap + self.reduced_acceptor_energy - x)
    }
    /// ln(positive charge) - ln(negative charge): strictly decreasing in x, zero at the
    /// solution, and of order one over the whole range, unlike the raw charge balance,
    /// which spans hundreds of decades at low temperature.
    fn residual(&self, x: f64) -> f64 {
        log_sum_exp(self.ln_holes(x), self.ln_ionized_donors(x))
            - log_sum_exp(self.ln_electrons(x), self.ln_ionized_acceptors(x))
    }
}

/// Solves p + N_D+ = n + N_A- for the Fermi level (bracketing, then bisection to the last
/// bit, which cannot fail on this strictly monotone residual) and returns the densities.
pub fn solve_charge_neutrality(
    dopants: &Dopants,
    bands: &BandModel,
    temperature_k: f64,
) -> Result<Equilibrium, ForwardError> {
    dopants.validate()?;
    bands.validate()?;
    require_positive("temperature_k", temperature_k)?;
    let thermal_ev = BOLTZMANN_EV_PER_K * temperature_k;
    let band_gap_ev = bands.band_gap_ev(temperature_k);
    if band_gap_ev.is_nan() || band_gap_ev <= 0.0 {
        return Err(ForwardError::InvalidParameter {
            name: "temperature_k",
            value: temperature_k,
            requirement: "choose a temperature at which the band model's gap is positive",
        });
    }
    let problem = ReducedProblem {
        ln_conduction_dos: bands.conduction_dos_m3(temperature_k).ln(),
        ln_valence_dos: bands.valence_dos_m3(temperature_k).ln(),
        ln_donor_density: dopants.donor_density_m3.ln(),
        ln_acceptor_density: dopants.acceptor_density_m3.ln(),
        ln_donor_degeneracy: dopants.donor_degeneracy.ln(),
        ln_acceptor_degeneracy: dopants.acceptor_degeneracy.ln(),
        reduced_gap: band_gap_ev / thermal_ev,
        reduced_donor_energy: dopants.donor_ionization_ev / thermal_ev,
        reduced_acceptor_energy: dopants.acceptor_ionization_ev / thermal_ev,
    };

    // Bracket: the residual is positive with E_F at the valence edge or below and negative
    // at the conduction edge or above, except for densities beyond the bands' effective
    // densities of states, where the bracket widens until the sign changes.
    let mut low = -problem.reduced_gap - 1.0;
    let mut high = 1.0;
    let mut step = 8.0;
    let mut expansions = 0;
    while problem.residual(low) <= 0.0 || problem.residual(high) >= 0.0 {
        if problem.residual(low) <= 0.0 {
            low -= step;
        }
        if problem.residual(high) >= 0.0 {
            high += step;
        }
        step *= 2.0;
        expansions += 1;
        if expansions > 60 {
            return Err(ForwardError::NoSolution(format!(
                "charge neutrality could not be bracketed at {temperature_k} K; check that the densities and the band model are physical"
            )));
        }
    }
    // Bisection to adjacent doubles: at most about 64 + 11 halvings of the bracket.
    for _ in 0..200 {
        let middle = 0.5 * (low + high);
        if middle <= low || middle >= high {
            break;
        }
        if problem.residual(middle) > 0.0 {
            low = middle;
        } else {
            high = middle;
        }
    }
    let x = 0.5 * (low + high);

    let electron_density_m3 = problem.ln_electrons(x).exp();
    let hole_density_m3 = problem.ln_holes(x).exp();
    let donor_fraction = 1.0 / (1.0 + dopants.donor_degeneracy * (x + problem.reduced_donor_energy).exp());
    let acceptor_fraction =
        1.0 / (1.0 + dopants.acceptor_degeneracy * (-problem.reduced_gap + problem.reduced_acceptor_energy - x).exp());
    let ionized_donor_density_m3 = dopants.donor_density_m3 * donor_fraction;
    let ionized_acceptor_density_m3 = dopants.acceptor_density_m3 * acceptor_fraction;
    let screening_density_m3 = electron_density_m3
        + hole_density_m3
        + ionized_donor_density_m3 * (1.0 - donor_fraction)
        + ionized_acceptor_density_m3 * (1.0 - acceptor_fraction);
    Ok(Equilibrium {
        temperature_k,
        fermi_level_below_conduction_ev: -x * thermal_ev,
        electron_density_m3,
        hole_density_m3,
        ionized_donor_density_m3,
        ionized_acceptor_density_m3,
        ionized_donor_fraction: donor_fraction,
        ionized_acceptor_fraction: acceptor_fraction,
        screening_density_m3,
    })
}

/// The right-hand side of the compensated single-donor equation, (Nc / g) exp(-E_D / kT),
/// m^-3, for a conduction-band density of states `conduction_dos_m3` already evaluated at
/// `temperature_k`.
pub fn freeze_out_constant_m3(
    conduction_dos_m3: f64,
    donor_degeneracy: f64,
    donor_ionization_ev: f64,
    temperature_k: f64,
) -> f64 {
    conduction_dos_m3 / donor_degeneracy * (-donor_ionization_ev / (BOLTZMANN_EV_PER_K * temperature_k)).exp()
}

/// The physical root of n (n + N_A) / (N_D - N_A - n) = K, m^-3, for a given K (see
/// [`freeze_out_constant_m3`]).
///
/// As a quadratic, n^2 + (N_A + K) n - K (N_D - N_A) = 0; its positive root is written as
/// n = 2 K (N_D - N_A) / ((N_A + K) + sqrt((N_A + K)^2 + 4 K (N_D - N_A))), which never
/// subtracts nearly equal numbers (the textbook form loses all digits when K << N_A, the
/// freeze-out regime the fits care most about). Requires N_D > N_A >= 0 and K >= 0.
pub fn compensated_donor_root_m3(
    donor_density_m3: f64,
    acceptor_density_m3: f64,
    freeze_out_constant_m3: f64,
) -> Result<f64, ForwardError> {
    require_non_negative("acceptor_density_m3", acceptor_density_m3)?;
    require_non_negative("freeze_out_constant_m3", freeze_out_constant_m3)?;
    require_finite("donor_density_m3", donor_density_m3)?;
    let net_donors = donor_density_m3 - acceptor_density_m3;
    if net_donors.is_nan() || net_donors <= 0.0 {
        return Err(ForwardError::InvalidParameter {
            name: "donor_density_m3",
            value: donor_density_m3,
            requirement: "the donor density must exceed the acceptor density for n-type freeze-out",
        });
    }
    if freeze_out_constant_m3 == 0.0 {
        return Ok(0.0);
    }
    let linear = acceptor_density_m3 + freeze_out_constant_m3;
    let discriminant = linear * linear + 4.0 * freeze_out_constant_m3 * net_donors;
    Ok(2.0 * freeze_out_constant_m3 * net_donors / (linear + discriminant.sqrt()))
}

/// Electron density of a compensated n-type crystal from the closed form, m^-3: the
/// equation of Blakemore (1962) and Look (1989) with Nc from `bands` at `temperature_k`.
pub fn compensated_donor_electron_density_m3(
    donor_density_m3: f64,
    acceptor_density_m3: f64,
    donor_ionization_ev: f64,
    donor_degeneracy: f64,
    bands: &BandModel,
    temperature_k: f64,
) -> Result<f64, ForwardError> {
    require_positive("temperature_k", temperature_k)?;
    require_positive("donor_degeneracy", donor_degeneracy)?;
    require_finite("donor_ionization_ev", donor_ionization_ev)?;
    let constant = freeze_out_constant_m3(
        bands.conduction_dos_m3(temperature_k),
        donor_degeneracy,
        donor_ionization_ev,
        temperature_k,
    );
    compensated_donor_root_m3(donor_density_m3, acceptor_density_m3, constant)
}

#[cfg(test)]
mod tests {
    use super::*;

    const CM3: f64 = 1e6; // cm^-3 to m^-3

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        ((actual - expected) / expected).abs() <= relative
    }

    // Levinshtein, Rumyantsev and Shur: Nc = 6.2e15 T^1.5, Nv = 3.5e15 T^1.5 cm^-3; at 300 K
    // 3.22161e19 and 1.81865e19 cm^-3, computed from those expressions.
    #[test]
    fn silicon_effective_densities_of_states_at_300_k() {
        let si = BandModel::silicon();
        assert!(close(si.conduction_dos_m3(300.0), 3.22161e19 * CM3, 2e-6));
        assert!(close(si.valence_dos_m3(300.0), 1.81865e19 * CM3, 2e-6));
        // T^1.5 scaling: computed from the same expression at 77 K.
        assert!(close(si.conduction_dos_m3(77.0), 6.2e15 * 77f64.powf(1.5) * CM3, 1e-13));
    }

    // Eg(T) = 1.17 - 4.73e-4 T^2/(T + 636) eV (Levinshtein, Rumyantsev and Shur); values at
    // 77, 300 and 400 K computed from that expression.
    #[test]
    fn silicon_band_gap_follows_varshni() {
        let si = BandModel::silicon();
        assert!((si.band_gap_ev(77.0) - 1.166067).abs() < 1e-6);
        assert!((si.band_gap_ev(300.0) - 1.124519).abs() < 1e-6);
        assert!((si.band_gap_ev(400.0) - 1.096950).abs() < 1e-6);
        assert_eq!(si.band_gap_ev(0.0), 1.17);
    }

    // n(77 K) = 3.5964e15, n(100 K) = 6.7691e15, n(300 K) = 9.8608e15 cm^-3 for
    // Nc = 2.86e19 (T/300)^1.5, g = 2, E_D = 0.045 eV, N_D = 1e16, N_A = 1e14: computed from
    // the compensated single-donor equation (Blakemore 1962; Look 1989).
    #[test]
    fn closed_form_freeze_out_matches_values_computed_from_the_equation() {
        let bands = BandModel::silicon().with_conduction_dos_300k_m3(2.86e19 * CM3);
        for (temperature_k, expected_cm3) in [(77.0, 3.5964e15), (100.0, 6.7691e15), (300.0, 9.8608e15)] {
            let n = compensated_donor_electron_density_m3(1e16 * CM3, 1e14 * CM3, 0.045, 2.0, &bands, temperature_k)
                .unwrap();
            // Within half a unit of the printed fifth digit.
            assert!((n / CM3 - expected_cm3).abs() <= 0.00005e15, "{temperature_k} K: {n}");
            // The root satisfies the equation it solves.
            let lhs = n * (n + 1e14 * CM3) / (1e16 * CM3 - 1e14 * CM3 - n);
            let rhs = freeze_out_constant_m3(bands.conduction_dos_m3(temperature_k), 2.0, 0.045, temperature_k);
            assert!(close(lhs, rhs, 1e-12));
        }
    }

    #[test]
    fn closed_form_keeps_its_digits_deep_in_freeze_out() {
        // K << N_A: n -> K (N_D - N_A) / N_A, the regime where the slope of ln(n T^-1.5)
        // against 1/kT is E_D (Look 1989).
        let (donors, acceptors) = (3e21, 2e20);
        for constant in [1e-5, 1.0, 1e5, 1e10] {
            let n = compensated_donor_root_m3(donors, acceptors, constant).unwrap();
            let limit = constant * (donors - acceptors) / acceptors;
            assert!(close(n, limit, 1e-9), "{constant}: {n} vs {limit}");
        }
        // Uncompensated: n -> sqrt(K N_D) - K/2 for K << N_D (slope E_D / 2); the next term
        // is K / (8 N_D) = 1.25e-11 relative here.
        let n = compensated_donor_root_m3(1e22, 0.0, 1e12).unwrap();
        assert!(close(n, (1e12f64 * 1e22).sqrt() - 0.5e12, 5e-11));
        // High temperature: n -> N_D - N_A.
        let n = compensated_donor_root_m3(1e22, 1e20, 1e30).unwrap();
        assert!(close(n, 1e22 - 1e20, 1e-7));
        assert_eq!(compensated_donor_root_m3(1e22, 1e20, 0.0).unwrap(), 0.0);
        assert!(compensated_donor_root_m3(1e20, 1e20, 1.0).is_err());
    }

    // With holes and the acceptor level's occupancy negligible the full neutrality
    // condition is the compensated single-donor equation (Blakemore 1962; Look 1989).
    #[test]
    fn full_solver_agrees_with_the_closed_form_where_it_applies() {
        let bands = BandModel::silicon();
        let dopants = Dopants::new(3e15 * CM3, 2e14 * CM3, 0.045, 0.045);
        for temperature_k in [15.0, 20.0, 30.0, 50.0, 77.0, 100.0, 150.0, 200.0, 300.0] {
            let full = solve_charge_neutrality(&dopants, &bands, temperature_k).unwrap();
            let closed =
                compensated_donor_electron_density_m3(3e15 * CM3, 2e14 * CM3, 0.045, 2.0, &bands, temperature_k)
                    .unwrap();
            assert!(full.hole_density_m3 < 1e-10 * full.electron_density_m3);
            assert!(full.ionized_acceptor_fraction > 1.0 - 1e-9);
            assert!(
                close(full.electron_density_m3, closed, 1e-9),
                "{temperature_k} K: {} vs {closed}",
                full.electron_density_m3
            );
            // The charge balance itself.
            let positive = full.hole_density_m3 + full.ionized_donor_density_m3;
            let negative = full.electron_density_m3 + full.ionized_acceptor_density_m3;
            assert!(close(positive, negative, 1e-12));
            // Brooks' screening density for a compensated n-type crystal.
            let n = full.electron_density_m3;
            let brooks = n + (n + 2e14 * CM3) * (3e15 * CM3 - 2e14 * CM3 - n) / (3e15 * CM3);
            assert!(close(full.screening_density_m3, brooks, 1e-6));
        }
        // At 400 K intrinsic holes appear (p/n ~ 3e-6): the closed form, which has no holes,
        // is off by about p, which the full solver adds to n.
        let full = solve_charge_neutrality(&dopants, &bands, 400.0).unwrap();
        let closed = compensated_donor_electron_density_m3(3e15 * CM3, 2e14 * CM3, 0.045, 2.0, &bands, 400.0).unwrap();
        let excess = full.electron_density_m3 - closed;
        assert!(full.hole_density_m3 > 1e-7 * full.electron_density_m3);
        assert!(
            excess > 0.0 && excess < 1.01 * full.hole_density_m3,
            "{excess} vs {}",
            full.hole_density_m3
        );
    }

    // Intrinsic limit: n = p = n_i with n_i^2 = Nc Nv exp(-Eg / kT) (mass action, standard
    // texts); the Levinshtein, Rumyantsev and Shur bands give n_i(300 K) = 8.68e9 cm^-3
    // (computed from their Nc, Nv and Eg expressions).
    #[test]
    fn undoped_material_is_intrinsic() {
        let bands = BandModel::silicon();
        for temperature_k in [150.0, 300.0, 400.0, 700.0] {
            let state = solve_charge_neutrality(&Dopants::none(), &bands, temperature_k).unwrap();
            let thermal_ev = BOLTZMANN_EV_PER_K * temperature_k;
            let intrinsic_squared = bands.conduction_dos_m3(temperature_k)
                * bands.valence_dos_m3(temperature_k)
                * (-bands.band_gap_ev(temperature_k) / thermal_ev).exp();
            assert!(close(state.electron_density_m3, state.hole_density_m3, 1e-12));
            assert!(close(
                state.electron_density_m3 * state.hole_density_m3,
                intrinsic_squared,
                1e-11
            ));
            assert!(close(
                state.electron_density_m3,
                bands.intrinsic_density_m3(temperature_k),
                1e-12
            ));
        }
        assert!(close(bands.intrinsic_density_m3(300.0), 8.68e9 * CM3, 1e-3));
    }

    #[test]
    fn p_type_and_heavily_compensated_cases_balance_charge() {
        let bands = BandModel::silicon();
        // Boron-doped: holes, acceptors partly frozen out at 50 K.
        let boron = Dopants::new(1e13 * CM3, 1e16 * CM3, 0.045, 0.045);
        let state = solve_charge_neutrality(&boron, &bands, 50.0).unwrap();
        assert!(state.hole_density_m3 > 1e6 * state.electron_density_m3);
        assert!(state.ionized_acceptor_fraction < 0.5);
        let balance = (state.hole_density_m3 + state.ionized_donor_density_m3)
            / (state.electron_density_m3 + state.ionized_acceptor_density_m3);
        assert!(close(balance, 1.0, 1e-12));
        // Holes obey the mirror image of the compensated single-donor equation,
        // p (p + N_D) / (N_A - N_D - p) = (Nv / g_A) exp(-E_A / kT) (Blakemore 1962), wherever
        // electrons and donor occupancy are negligible; at 300 K about 1 % of the boron is
        // still neutral.
        for temperature_k in [30.0, 77.0, 300.0] {
            let state = solve_charge_neutrality(&boron, &bands, temperature_k).unwrap();
            let constant = freeze_out_constant_m3(bands.valence_dos_m3(temperature_k), 4.0, 0.045, temperature_k);
            let mirror = compensated_donor_root_m3(1e16 * CM3, 1e13 * CM3, constant).unwrap();
            assert!(close(state.hole_density_m3, mirror, 1e-9), "{temperature_k} K");
        }
        // At very low temperature the solver still brackets (residual spans ~1e3 kT).
        let state = solve_charge_neutrality(&boron, &bands, 4.0).unwrap();
        assert!(state.hole_density_m3 > 0.0 && state.hole_density_m3.is_finite());
    }

    #[test]
    fn refuses_unphysical_input() {
        let bands = BandModel::silicon();
        assert!(solve_charge_neutrality(&Dopants::none(), &bands, 0.0).is_err());
        assert!(solve_charge_neutrality(&Dopants::new(-1.0, 0.0, 0.04, 0.04), &bands, 300.0).is_err());
        let bad_bands = bands.with_conduction_dos_300k_m3(f64::NAN);
        assert!(solve_charge_neutrality(&Dopants::none(), &bad_bands, 300.0).is_err());
        // Varshni gap closes far above any real temperature of this model.
        assert!(solve_charge_neutrality(&Dopants::none(), &bands, 1e5).is_err());
    }
}
