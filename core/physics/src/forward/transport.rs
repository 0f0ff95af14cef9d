//! From doping and temperature to what a Hall measurement sees: the electron density from
//! charge neutrality, the mobility from lattice and ionized-impurity scattering, and the
//! resulting resistivity, sheet resistance and Hall coefficient of an n-type layer.
//!
//! Only electrons conduct in this model: [`NTypeTransport`] also reports the hole density
//! so that a caller can check that p << n over its temperature range. The mobility is the
//! drift mobility; the Hall coefficient carries a constant Hall scattering factor r_H, so
//! that R_H = -r_H / (e n) at every field (the low-field expression).

use super::mobility::{lattice_mobility_m2_per_vs, matthiessen_m2_per_vs, ScatteringMedium};
use super::statistics::{solve_charge_neutrality, BandModel, Dopants, Equilibrium};
use super::{require_positive, ForwardError};
use crate::constants::ELEMENTARY_CHARGE_C;

/// Electron mobility as lattice scattering (a power law) combined by Matthiessen's rule with
/// Brooks-Herring scattering on the ionized impurities N_D+ + N_A-, screened by the density
/// of [`Equilibrium::screening_density_m3`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MobilityModel {
    /// Lattice-limited mobility at 300 K, m^2/(V s).
    pub lattice_mobility_300k_m2_per_vs: f64,
    /// Exponent alpha of mu_L = mu_300 (T / 300 K)^-alpha.
    pub lattice_exponent: f64,
    /// Mass and permittivity for ionized-impurity scattering.
    pub medium: ScatteringMedium,
    /// Charge number Z of the ionized impurities (1 for shallow dopants).
    pub impurity_charge_number: f64,
    /// Hall scattering factor r_H, taken as constant.
    pub hall_factor: f64,
}

impl MobilityModel {
    /// Electrons in silicon: lattice mobility 1448 (T/300)^-2.33 cm^2/(V s) (Arora et al.,
    /// IEEE Trans. Electron Devices 29, 292, 1982), conductivity mass 0.26, eps_r 11.7,
    /// singly charged impurities, r_H = 1.
    pub fn silicon_electrons() -> Self {
        MobilityModel {
            lattice_mobility_300k_m2_per_vs: 1448.0e-4,
            lattice_exponent: 2.33,
            medium: ScatteringMedium::SILICON_ELECTRONS,
            impurity_charge_number: 1.0,
            hall_factor: 1.0,
        }
    }

    fn validate(&self) -> Result<(), ForwardError> {
        require_positive("lattice_mobility_300k_m2_per_vs", self.lattice_mobility_300k_m2_per_vs)?;
        require_positive("effective_mass_ratio", self.medium.effective_mass_ratio)?;
        require_positive("relative_permittivity", self.medium.relative_permittivity)?;
        require_positive("impurity_charge_number", self.impurity_charge_number)?;
        require_positive("hall_factor", self.hall_factor)?;
        super::require_finite("lattice_exponent", self.lattice_exponent)?;
        Ok(())
    }
}

/// Transport properties of an n-type layer at one temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NTypeTransport {
    /// The charge-neutral state: n, p, ionized fractions, screening density.
    pub equilibrium: Equilibrium,
    /// Lattice-limited mobility, m^2/(V s).
    pub lattice_mobility_m2_per_vs: f64,
    /// Brooks-Herring ionized-impurity mobility, m^2/(V s).
    pub impurity_mobility_m2_per_vs: f64,
    /// Drift mobility (Matthiessen), m^2/(V s).
    pub mobility_m2_per_vs: f64,
    /// Hall mobility r_H mu, m^2/(V s).
    pub hall_mobility_m2_per_vs: f64,
    /// rho = 1 / (e n mu), ohm m.
    pub resistivity_ohm_m: f64,
    /// rho / t, ohm per square.
    pub sheet_resistance_ohm_sq: f64,
    /// R_H = -r_H / (e n), m^3/C (negative: electrons).
    pub hall_coefficient_m3_per_c: f64,
    /// R_H / t, m^2/C: the Hall resistance per tesla, V_H / (I B).
    pub sheet_hall_coefficient_m2_per_c: f64,
}

/// Electron density, mobility, resistivity and Hall coefficient of an n-type layer of
/// thickness `thickness_m` at `temperature_k`.
pub fn n_type_transport(
    dopants: &Dopants,
    bands: &BandModel,
    thickness_m: f64,
    temperature_k: f64,
    model: &MobilityModel,
) -> Result<NTypeTransport, ForwardError> {
    require_positive("thickness_m", thickness_m)?;
    model.validate()?;
    let equilibrium = solve_charge_neutrality(dopants, bands, temperature_k)?;
    let electrons = equilibrium.electron_density_m3;
    if !(electrons > 0.0 && electrons.is_finite()) {
        return Err(ForwardError::NoSolution(format!(
            "the electron density at {temperature_k} K is {electrons} m^-3; raise the temperature or the donor density"
        )));
    }
    let lattice = lattice_mobility_m2_per_vs(
        model.lattice_mobility_300k_m2_per_vs,
        model.lattice_exponent,
        temperature_k,
    );
    let impurity = model.medium.brooks_herring_mobility_m2_per_vs(
        equilibrium.ionized_impurity_density_m3(),
        equilibrium.screening_density_m3,
        temperature_k,
        model.impurity_charge_number,
    );
    let mobility = matthiessen_m2_per_vs(&[lattice, impurity]);
    let resistivity = 1.0 / (ELEMENTARY_CHARGE_C * electrons * mobility);
    let hall_coefficient = -model.hall_factor / (ELEMENTARY_CHARGE_C * electrons);
    Ok(NTypeTransport {
        equilibrium,
        lattice_mobility_m2_per_vs: lattice,
        impurity_mobility_m2_per_vs: impurity,
        mobility_m2_per_vs: mobility,
        hall_mobility_m2_per_vs: model.hall_factor * mobility,
        resistivity_ohm_m: resistivity,
        sheet_resistance_ohm_sq: resistivity / thickness_m,
        hall_coefficient_m3_per_c: hall_coefficient,
        sheet_hall_coefficient_m2_per_c: hall_coefficient / thickness_m,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    const CM3: f64 = 1e6;

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        ((actual - expected) / expected).abs() <= relative
    }

    fn lightly_doped_silicon() -> Dopants {
        Dopants::new(3e15 * CM3, 2e14 * CM3, 0.045, 0.045)
    }

    // At 300 K the shallow donors are ionized: n = N_D - N_A, and rho = 1/(e n mu),
    // R_H = -r_H/(e n), mu_H = |R_H| / rho (standard texts).
    #[test]
    fn room_temperature_layer_follows_the_textbook_relations() {
        let model = MobilityModel {
            hall_factor: 1.18,
            ..MobilityModel::silicon_electrons()
        };
        let layer = n_type_transport(&lightly_doped_silicon(), &BandModel::silicon(), 5e-4, 300.0, &model).unwrap();
        let n = layer.equilibrium.electron_density_m3;
        // N_D - N_A = 2.8e15 cm^-3, less the 0.1 % of donors still neutral at 300 K.
        assert!(n < 2.8e15 * CM3 && close(n, 2.8e15 * CM3, 2e-3));
        assert!(close(
            layer.resistivity_ohm_m,
            1.0 / (ELEMENTARY_CHARGE_C * n * layer.mobility_m2_per_vs),
            1e-14
        ));
        assert!(close(
            layer.sheet_resistance_ohm_sq,
            layer.resistivity_ohm_m / 5e-4,
            1e-14
        ));
        assert!(layer.hall_coefficient_m3_per_c < 0.0);
        assert!(close(
            -layer.hall_coefficient_m3_per_c * ELEMENTARY_CHARGE_C * n,
            1.18,
            1e-14
        ));
        assert!(close(
            layer.hall_coefficient_m3_per_c.abs() / layer.resistivity_ohm_m,
            layer.hall_mobility_m2_per_vs,
            1e-12
        ));
        // Lightly doped Si at 300 K: electrons about 1400 cm^2/Vs (common handbook value); the
        // impurity term takes a few percent off the 1448 lattice value of Arora et al. (1982).
        let mobility_cm2 = layer.mobility_m2_per_vs * 1e4;
        assert!(mobility_cm2 > 1300.0 && mobility_cm2 < 1448.0, "{mobility_cm2}");
    }

    // Freeze-out: fewer carriers and more resistance as the temperature falls (facts of the
    // trade), and impurity scattering takes over from the lattice at low temperature.
    #[test]
    fn cooling_freezes_out_carriers() {
        let model = MobilityModel::silicon_electrons();
        let bands = BandModel::silicon();
        let temperatures = [20.0, 40.0, 77.0, 150.0, 300.0];
        let layers: Vec<_> = temperatures
            .iter()
            .map(|&t| n_type_transport(&lightly_doped_silicon(), &bands, 5e-4, t, &model).unwrap())
            .collect();
        for pair in layers.windows(2) {
            assert!(pair[0].equilibrium.electron_density_m3 < pair[1].equilibrium.electron_density_m3);
        }
        assert!(layers[0].equilibrium.electron_density_m3 < 1e-6 * 2.8e15 * CM3);
        assert!(layers[0].impurity_mobility_m2_per_vs < layers[0].lattice_mobility_m2_per_vs);
        assert!(layers[4].impurity_mobility_m2_per_vs > layers[4].lattice_mobility_m2_per_vs);
        assert!(layers[0].sheet_resistance_ohm_sq > 1e4 * layers[4].sheet_resistance_ohm_sq);
    }

    #[test]
    fn refuses_unphysical_input() {
        let model = MobilityModel::silicon_electrons();
        let bands = BandModel::silicon();
        assert!(n_type_transport(&lightly_doped_silicon(), &bands, 0.0, 300.0, &model).is_err());
        let bad_model = MobilityModel {
            hall_factor: -1.0,
            ..model
        };
        assert!(n_type_transport(&lightly_doped_silicon(), &bands, 5e-4, 300.0, &bad_model).is_err());
    }
}
