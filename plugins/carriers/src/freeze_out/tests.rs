//! Tests of the `freeze_out` module: published check values, recovery from forward-generated data, and bad input.

use super::*;
use crate::materials::{Material, MaterialOverrides};
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::statistics::{solve_charge_neutrality, Dopants};

const CM3: f64 = 1e6; // cm^-3 to m^-3

/// A synthetic sample: which dopants, and how the series is measured.
#[derive(Debug, Clone)]
struct Case {
    name: &'static str,
    material: Material,
    carrier_type: CarrierType,
    /// Majority dopant density, cm^-3.
    dopant_cm3: f64,
    /// Compensating over dopant density.
    ratio: f64,
    /// Majority level, eV.
    energy_ev: f64,
    /// Relative noise of the densities (standard deviation of ln n).
    noise: f64,
    /// Give the uncertainties to the fit.
    weighted: bool,
    seed: u64,
}

impl Case {
    /// The dopants as core's neutrality solver takes them; the compensating level is put
    /// 45 meV from its band, a shallow level, so that the data contain its (negligible)
    /// occupancy while the fit assumes full ionization.
    fn dopants(&self) -> Dopants {
        let majority = self.dopant_cm3 * CM3;
        let compensating = self.ratio * majority;
        match self.carrier_type {
            CarrierType::N => Dopants::new(majority, compensating, self.energy_ev, 0.045),
            CarrierType::P => Dopants::new(compensating, majority, 0.045, self.energy_ev),
        }
    }

    /// The true majority density at `temperature_k` from core's full neutrality solver.
    fn density(&self, temperature_k: f64) -> f64 {
        let state = solve_charge_neutrality(&self.dopants(), &self.material.band_model(), temperature_k).unwrap();
        match self.carrier_type {
            CarrierType::N => state.electron_density_m3,
            CarrierType::P => state.hole_density_m3,
        }
    }

    /// Thirty temperatures, geometrically spaced from deep freeze-out (the density below 3 %
    /// of the compensating density, so that the data show N_comp) up to saturation (97 % of
    /// the net density, so that they show N_maj - N_comp).
    fn temperatures(&self) -> Vec<f64> {
        let majority = self.dopant_cm3 * CM3;
        let compensating = self.ratio * majority;
        let net = majority - compensating;
        let mut low = 300.0;
        while self.density(low) > 0.03 * compensating {
            low *= 0.97;
            assert!(low > 1.5, "{}: no freeze-out above 1.5 K", self.name);
        }
        let mut high = low;
        while self.density(high) < 0.97 * net {
            high *= 1.03;
            assert!(high < 1500.0, "{}: no saturation below 1500 K", self.name);
        }
        (0..30).map(|k| low * (high / low).powf(k as f64 / 29.0)).collect()
    }

    fn points(&self) -> Vec<DensityPoint> {
        let mut rng = Rng::seeded(self.seed);
        self.temperatures()
            .into_iter()
            .map(|temperature_k| {
                let density = self.density(temperature_k) * (self.noise * rng.standard_normal()).exp();
                DensityPoint {
                    temperature_k,
                    density_m3: density,
                    density_unc_m3: self.weighted.then_some(self.noise * density),
                    carrier_type: Some(self.carrier_type),
                    ..DensityPoint::default()
                }
            })
            .collect()
    }

    fn settings(&self) -> FreezeOutSettings {
        FreezeOutSettings::for_material(self.material.clone())
    }
}

fn case(
    name: &'static str,
    material: Material,
    carrier_type: CarrierType,
    dopant_cm3: f64,
    ratio: f64,
    energy_ev: f64,
) -> Case {
    Case {
        name,
        material,
        carrier_type,
        dopant_cm3,
        ratio,
        energy_ev,
        noise: 0.01,
        weighted: true,
        seed: name
            .bytes()
            .fold(7u64, |hash, byte| hash.wrapping_mul(31).wrapping_add(byte as u64)),
    }
}

/// Parameter sets spanning n and p type, compensation 0.01 to 0.8, levels 10 to 150 meV and
/// six materials. The levels are those of real dopants (Si: P 45 meV, As 54 meV, B 45 meV,
/// In 157 meV, the handbook ionization energies as charted in S. M. Sze, Physics of
/// Semiconductor Devices, recalled from memory; the others from memory too) but any values
/// would do: the data are synthetic.
fn recovery_cases() -> Vec<Case> {
    let mut cases = vec![
        case("Si:P light", Material::silicon(), CarrierType::N, 1e15, 0.05, 0.045),
        case("Si:As heavy", Material::silicon(), CarrierType::N, 5e16, 0.8, 0.054),
        case("Si:B", Material::silicon(), CarrierType::P, 1e16, 0.01, 0.045),
        case("Si:In", Material::silicon(), CarrierType::P, 3e16, 0.3, 0.150),
        case("Ge:Sb", Material::germanium(), CarrierType::N, 1e14, 0.1, 0.010),
        case("Ge:Ga", Material::germanium(), CarrierType::P, 5e14, 0.5, 0.011),
        case(
            "GaAs:Si",
            Material::gallium_arsenide(),
            CarrierType::N,
            1e16,
            0.4,
            0.012,
        ),
        case(
            "GaAs:C",
            Material::gallium_arsenide(),
            CarrierType::P,
            1e17,
            0.02,
            0.026,
        ),
        case("InP:S", Material::indium_phosphide(), CarrierType::N, 3e15, 0.2, 0.015),
        case("GaN:Si", Material::gallium_nitride(), CarrierType::N, 5e16, 0.1, 0.030),
        case("GaN:Mg", Material::gallium_nitride(), CarrierType::P, 1e18, 0.05, 0.150),
        case(
            "4H-SiC:N",
            Material::silicon_carbide_4h(),
            CarrierType::N,
            1e16,
            0.03,
            0.060,
        ),
        case(
            "4H-SiC:Al",
            Material::silicon_carbide_4h(),
            CarrierType::P,
            5e16,
            0.15,
            0.120,
        ),
    ];
    // Unweighted fits: the scatter sets the standard errors.
    let mut unweighted = case("Si:P unweighted", Material::silicon(), CarrierType::N, 2e15, 0.2, 0.045);
    unweighted.weighted = false;
    unweighted.noise = 0.02;
    cases.push(unweighted);
    let mut noisy_p = case(
        "Ge:Ga unweighted",
        Material::germanium(),
        CarrierType::P,
        2e15,
        0.05,
        0.011,
    );
    noisy_p.weighted = false;
    cases.push(noisy_p);
    cases
}

fn pull(value: f64, truth: f64, unc: Option<f64>) -> f64 {
    (value - truth) / unc.expect("an uncertainty for a parameter off its bounds")
}

/// Checks a fit against the case's truth: within four reported standard errors (45 checks
/// at four sigma fail by chance with probability about 3e-3 in all), and within relative
/// bounds that a lab would call a success for 1-2 % density noise: the ionization energy to
/// 5 %, the dopant density to 20 %, the compensating density to 40 %. The density bounds are
/// set by the heavily compensated samples (c of 0.3 to 0.8), whose dopant and compensating
/// densities follow only from the compensation ratio, with standard errors of 6 % and 12 %
/// for 30 points at 1 % noise: the bounds are about three of those.
fn assert_recovered(case: &Case, fit: &FreezeOutFit) {
    assert_recovered_by(case, fit, 2);
}

/// [`assert_recovered`] with the number of starts that must have reached the best minimum.
fn assert_recovered_by(case: &Case, fit: &FreezeOutFit, starts_at_best: usize) {
    let dopant = case.dopant_cm3 * CM3;
    let compensating = case.ratio * dopant;
    let label = case.name;
    assert_eq!(fit.carrier_type, case.carrier_type, "{label}");
    assert!(fit.at_bound.is_empty(), "{label}: at bound {:?}", fit.at_bound);
    let checks = [
        (
            "E",
            fit.ionization_energy_ev,
            case.energy_ev,
            fit.ionization_energy_ev_unc,
            0.05,
        ),
        ("N_maj", fit.dopant_density_m3, dopant, fit.dopant_density_m3_unc, 0.20),
        (
            "N_comp",
            fit.compensating_density_m3,
            compensating,
            fit.compensating_density_m3_unc,
            0.40,
        ),
    ];
    for (name, value, truth, unc, relative) in checks {
        let p = pull(value, truth, unc);
        assert!(
            p.abs() < 4.0,
            "{label}: {name} = {value:e} +- {:e}, truth {truth:e} (pull {p:.2})",
            unc.unwrap()
        );
        assert!(
            ((value - truth) / truth).abs() < relative,
            "{label}: {name} = {value:e}, truth {truth:e}"
        );
    }
    assert!(
        fit.starts_at_best >= starts_at_best,
        "{label}: {} starts at the best minimum",
        fit.starts_at_best
    );
    if case.weighted {
        // chi^2 / nu for 27 degrees of freedom: 1 within 4 sqrt(2/27) = 1.09.
        assert!(
            (fit.reduced_chi_square - 1.0).abs() < 1.09,
            "{label}: {}",
            fit.reduced_chi_square
        );
    }
}

#[test]
fn recovers_dopants_of_many_synthetic_samples() {
    for case in recovery_cases() {
        let points = case.points();
        let fit = fit_freeze_out(&points, &case.settings()).unwrap_or_else(|error| panic!("{}: {error}", case.name));
        assert_recovered(&case, &fit);
        assert_eq!(fit.points.len(), 30);
        assert_eq!(fit.degrees_of_freedom, 27);
        assert_eq!(fit.weighted, case.weighted);
        // The only warning allowed is the one about intrinsic carriers (Si:In reaches 600 K,
        // where n_i^2 / p is a few percent of p, which the model includes).
        assert!(
            fit.warnings
                .iter()
                .all(|warning| warning.contains("intrinsic carriers")),
            "{}: {:?}",
            case.name,
            fit.warnings
        );
    }
}

#[test]
fn converges_from_deliberately_poor_starts_and_wide_bounds() {
    // No heuristic starts from the data: eight guesses that bracket the truth but miss it
    // everywhere (net density 30 times too low or too high, compensation 1e-4 or 0.7,
    // energy a fifth or five times the true one), inside bounds far wider than any real
    // sample needs. Started from such guesses alone, Levenberg-Marquardt can end in the local
    // minimum that trades compensation for energy (heavy compensation with a lower level);
    // the grid over the bounded box must find the global one.
    let mut worse_without_grid = false;
    for case in recovery_cases()
        .into_iter()
        .filter(|case| ["Si:B", "Si:As heavy", "GaN:Mg", "Ge:Sb", "4H-SiC:Al"].contains(&case.name))
    {
        let dopant = case.dopant_cm3 * CM3;
        let net = dopant * (1.0 - case.ratio);
        let mut settings = case.settings();
        settings.derive_starts_from_data = false;
        settings.ionization_energy_bounds_ev = (1e-4, 2.0);
        settings.compensation_bounds = (1e-9, 0.999);
        settings.net_density_bounds_m3 = Some((1e10, 1e28));
        settings.initial_guesses = Vec::new();
        for net_factor in [1.0 / 30.0, 30.0] {
            for ratio in [1e-4, 0.7] {
                for energy_factor in [0.2, 5.0] {
                    let guess_net = net * net_factor;
                    settings.initial_guesses.push(InitialGuess {
                        dopant_density_m3: guess_net / (1.0 - ratio),
                        compensating_density_m3: guess_net * ratio / (1.0 - ratio),
                        ionization_energy_ev: case.energy_ev * energy_factor,
                    });
                }
            }
        }
        let points = case.points();
        let fit = fit_freeze_out(&points, &settings).unwrap_or_else(|error| panic!("{}: {error}", case.name));
        // A single grid start may be the only one in the global basin.
        assert_recovered_by(&case, &fit, 1);
        // Eight guesses and up to four grid minima.
        assert!(fit.starts > 8 && fit.starts <= 8 + 4, "{}", fit.starts);
        // Without the grid, the poor guesses alone find a worse minimum for at least one of
        // these samples (checked below, outside the loop): the grid is what rescues them.
        settings.grid_search = false;
        if let Ok(alone) = fit_freeze_out(&points, &settings) {
            worse_without_grid |= alone.chi_square > 2.0 * fit.chi_square;
        } else {
            worse_without_grid = true;
        }
    }
    assert!(
        worse_without_grid,
        "the poor guesses were not poor enough to test the grid"
    );
}

#[test]
fn deliberately_poor_guesses_do_not_spoil_the_data_derived_starts() {
    // The same wide bounds and two absurd guesses next to the starts derived from the data.
    let case = recovery_cases().into_iter().find(|case| case.name == "Si:B").unwrap();
    let dopant = case.dopant_cm3 * CM3;
    let mut settings = case.settings();
    settings.ionization_energy_bounds_ev = (1e-4, 2.0);
    settings.compensation_bounds = (1e-9, 0.999);
    settings.net_density_bounds_m3 = Some((1e10, 1e28));
    settings.initial_guesses = vec![
        InitialGuess {
            dopant_density_m3: dopant * 1e-3,
            compensating_density_m3: dopant * 0.9e-3,
            ionization_energy_ev: 0.5,
        },
        InitialGuess {
            dopant_density_m3: dopant * 1e3,
            compensating_density_m3: 0.0,
            ionization_energy_ev: 0.002,
        },
    ];
    let fit = fit_freeze_out(&case.points(), &settings).unwrap();
    assert_recovered(&case, &fit);
    // Twelve heuristic starts, two guesses, up to four grid minima.
    assert!(fit.starts > 14 && fit.starts <= 18, "{}", fit.starts);
}

// Nc = 2.86e19 (T/300)^1.5 cm^-3 (M. A. Green, J. Appl. Phys. 67, 2944, 1990), g = 2, E_D = 0.045 eV,
// N_D = 1e16, N_A = 1e14 cm^-3: n(77 K) = 3.5964e15, n(100 K) = 6.7691e15,
// n(300 K) = 9.8608e15 cm^-3, computed from the compensated single-donor equation
// (Blakemore 1962; Look 1989). The fit's model adds holes, negligible here (n_i^2 / n is
// below 1e-10 of n at 300 K).
#[test]
fn model_reproduces_the_freeze_out_check_values() {
    let material = Material::silicon()
        .with_overrides(&MaterialOverrides {
            conduction_dos_300k_m3: Some(2.86e19 * CM3),
            ..MaterialOverrides::default()
        })
        .unwrap();
    let model = FreezeOutModel {
        carrier_type: CarrierType::N,
        bands: material.band_model(),
        dopant_density_m3: 1e16 * CM3,
        compensating_density_m3: 1e14 * CM3,
        ionization_energy_ev: 0.045,
        degeneracy: 2.0,
        compensating_level: None,
    };
    for (temperature_k, expected_cm3) in [(77.0, 3.5964e15), (100.0, 6.7691e15), (300.0, 9.8608e15)] {
        let n = model.carrier_density_m3(temperature_k) / CM3;
        // Within half a unit of the printed fifth digit.
        assert!((n - expected_cm3).abs() <= 0.00005e15, "{temperature_k} K: {n:e}");
    }
}

// The model solves the same neutrality condition as core's solver (charge balance of
// electrons, holes, ionized donors and acceptors, Boltzmann statistics), by Newton's method
// instead of bisection: the two must agree to rounding wherever both apply, from deep
// freeze-out into intrinsic conduction, for both carrier types.
#[test]
fn model_agrees_with_the_full_neutrality_solver() {
    let cases = [
        (Material::silicon(), CarrierType::N, 3e15, 2e14, 0.045, 0.045),
        (Material::silicon(), CarrierType::P, 1e16, 1e13, 0.157, 0.045),
        (Material::germanium(), CarrierType::N, 1e13, 5e12, 0.010, 0.011),
        (Material::germanium(), CarrierType::P, 1e14, 0.0, 0.011, 0.010),
        (Material::gallium_nitride(), CarrierType::P, 1e18, 1e17, 0.17, 0.02),
        (Material::gallium_arsenide(), CarrierType::N, 1e15, 9e14, 0.006, 0.03),
    ];
    for (material, carrier_type, majority_cm3, compensating_cm3, energy, compensating_energy) in cases {
        let model = FreezeOutModel {
            carrier_type,
            bands: material.band_model(),
            dopant_density_m3: majority_cm3 * CM3,
            compensating_density_m3: compensating_cm3 * CM3,
            ionization_energy_ev: energy,
            degeneracy: carrier_type.default_degeneracy(),
            compensating_level: Some(CompensatingLevel {
                ionization_energy_ev: compensating_energy,
                degeneracy: match carrier_type {
                    CarrierType::N => 4.0,
                    CarrierType::P => 2.0,
                },
            }),
        };
        let dopants = match carrier_type {
            CarrierType::N => Dopants::new(majority_cm3 * CM3, compensating_cm3 * CM3, energy, compensating_energy),
            CarrierType::P => Dopants::new(compensating_cm3 * CM3, majority_cm3 * CM3, compensating_energy, energy),
        };
        for temperature_k in [4.0, 8.0, 15.0, 30.0, 60.0, 100.0, 200.0, 300.0, 450.0, 600.0, 800.0] {
            let state = solve_charge_neutrality(&dopants, &material.band_model(), temperature_k).unwrap();
            let expected = match carrier_type {
                CarrierType::N => state.electron_density_m3,
                CarrierType::P => state.hole_density_m3,
            };
            let got = model.carrier_density_m3(temperature_k);
            assert!(
                ((got - expected) / expected).abs() < 1e-10,
                "{} {carrier_type} {temperature_k} K: {got:e} vs {expected:e}",
                material.name
            );
        }
    }
    // Without a compensating level (fully ionized) the difference is the compensating
    // level's occupancy, negligible in extrinsic material.
    let material = Material::silicon();
    let model = FreezeOutModel {
        carrier_type: CarrierType::N,
        bands: material.band_model(),
        dopant_density_m3: 3e15 * CM3,
        compensating_density_m3: 2e14 * CM3,
        ionization_energy_ev: 0.045,
        degeneracy: 2.0,
        compensating_level: None,
    };
    let dopants = Dopants::new(3e15 * CM3, 2e14 * CM3, 0.045, 0.045);
    for temperature_k in [10.0, 50.0, 300.0] {
        let state = solve_charge_neutrality(&dopants, &material.band_model(), temperature_k).unwrap();
        let got = model.carrier_density_m3(temperature_k);
        assert!(((got - state.electron_density_m3) / state.electron_density_m3).abs() < 1e-9);
    }
    // Unphysical parameters give NaN, not a hang or a panic.
    let broken = FreezeOutModel {
        compensating_density_m3: 4e15 * CM3,
        ..model
    };
    assert!(broken.carrier_density_m3(100.0).is_nan());
}

#[test]
fn intrinsic_conduction_is_fitted_exactly_and_flagged() {
    // Germanium doped to 2e13 cm^-3 measured up to 420 K, where n_i approaches the doping:
    // the closed form would be wrong by tens of percent there, the exact model is not.
    let mut case = case(
        "Ge intrinsic onset",
        Material::germanium(),
        CarrierType::N,
        2e13,
        0.1,
        0.010,
    );
    case.noise = 0.005;
    let mut points = case.points();
    let mut rng = Rng::seeded(4);
    for temperature_k in [330.0, 360.0, 390.0, 420.0] {
        let density = case.density(temperature_k) * (case.noise * rng.standard_normal()).exp();
        points.push(DensityPoint {
            temperature_k,
            density_m3: density,
            density_unc_m3: Some(case.noise * density),
            carrier_type: Some(CarrierType::N),
            ..DensityPoint::default()
        });
    }
    let net = 0.9 * case.dopant_cm3 * CM3;
    assert!(
        case.density(420.0) > 1.3 * net,
        "the series reaches intrinsic conduction"
    );
    let fit = fit_freeze_out(&points, &case.settings()).unwrap();
    assert_recovered(&case, &fit);
    assert!(
        fit.warnings
            .iter()
            .any(|warning| warning.contains("intrinsic carriers")),
        "{:?}",
        fit.warnings
    );
}

#[test]
fn effective_density_of_states_override_changes_the_majority_band() {
    // Data from silicon with Green's Nc (2.86e19 cm^-3, Green 1990 as above) are recovered when the
    // fit is told that Nc; with the default Levinshtein Nc (3.22e19) the fitted energy and
    // compensation shift to absorb the 13 % difference.
    let green = Material::silicon()
        .with_overrides(&MaterialOverrides {
            conduction_dos_300k_m3: Some(2.86e19 * CM3),
            ..MaterialOverrides::default()
        })
        .unwrap();
    let green_case = case("Si:P Green", green, CarrierType::N, 1e15, 0.05, 0.045);
    let points = green_case.points();
    let settings = FreezeOutSettings {
        effective_dos_300k_m3: Some(2.86e19 * CM3),
        ..FreezeOutSettings::default()
    };
    let fit = fit_freeze_out(&points, &settings).unwrap();
    assert_recovered(&green_case, &fit);
    assert_eq!(fit.model.bands.conduction_dos_300k_m3, 2.86e19 * CM3);
    let default = fit_freeze_out(&points, &FreezeOutSettings::default()).unwrap();
    assert!((default.chi_square - fit.chi_square).abs() > 0.0);
    assert!((default.compensating_density_m3 / fit.compensating_density_m3 - 1.0).abs() > 0.05);
    // For p-type data the override replaces Nv, not Nc.
    let p_case = case("Si:B override", Material::silicon(), CarrierType::P, 1e16, 0.05, 0.045);
    let p_settings = FreezeOutSettings {
        effective_dos_300k_m3: Some(Material::silicon().valence_dos_300k_m3),
        ..FreezeOutSettings::default()
    };
    let p_fit = fit_freeze_out(&p_case.points(), &p_settings).unwrap();
    assert_eq!(p_fit.model.bands, Material::silicon().band_model());
    assert_recovered(&p_case, &p_fit);
    let bad = FreezeOutSettings {
        effective_dos_300k_m3: Some(0.0),
        ..FreezeOutSettings::default()
    };
    assert!(matches!(
        fit_freeze_out(&points, &bad),
        Err(FreezeOutError::InvalidSetting {
            setting: "effective_dos_300K_m3",
            ..
        })
    ));
}

#[test]
fn hall_factor_correction_is_applied_before_fitting() {
    // Densities reduced with r_H = 1 are n / r_H; acoustic-phonon scattering (s = -1/2)
    // gives r_H = 3 pi / 8 (E. H. Putley, The Hall Effect and Related Phenomena, 1960).
    let case = case(
        "Si:P Hall factor",
        Material::silicon(),
        CarrierType::N,
        1e15,
        0.05,
        0.045,
    );
    let r_h = 3.0 * std::f64::consts::PI / 8.0;
    let hall_points: Vec<DensityPoint> = case
        .points()
        .into_iter()
        .map(|point| DensityPoint {
            density_m3: point.density_m3 / r_h,
            density_unc_m3: point.density_unc_m3.map(|u| u / r_h),
            ..point
        })
        .collect();
    let mut settings = case.settings();
    settings.hall_factor = HallFactor::ScatteringExponent(-0.5);
    let fit = fit_freeze_out(&hall_points, &settings).unwrap();
    assert!((fit.hall_factor.unwrap() - r_h).abs() < 1e-12);
    assert_recovered(&case, &fit);
    settings.hall_factor = HallFactor::Constant(r_h);
    let constant = fit_freeze_out(&hall_points, &settings).unwrap();
    assert!((constant.dopant_density_m3 / fit.dopant_density_m3 - 1.0).abs() < 1e-9);
    // Uncorrected, the densities are low by r_H: the fit's net density follows them.
    settings.hall_factor = HallFactor::Unity;
    let uncorrected = fit_freeze_out(&hall_points, &settings).unwrap();
    assert!((fit.net_density_m3 / uncorrected.net_density_m3 / r_h - 1.0).abs() < 0.02);
}

#[test]
fn result_carries_points_curve_and_consistent_statistics() {
    let case = case("Si:B curve", Material::silicon(), CarrierType::P, 1e16, 0.1, 0.045);
    let points = case.points();
    let mut settings = case.settings();
    settings.curve_points = 50;
    let fit = fit_freeze_out(&points, &settings).unwrap();
    assert_eq!(fit.curve.len(), 50);
    let (t_min, t_max) = (fit.points[0].temperature_k, fit.points[29].temperature_k);
    assert_eq!(fit.curve[0].temperature_k, t_min);
    assert_eq!(fit.curve[49].temperature_k, t_max);
    assert!(fit
        .curve
        .windows(2)
        .all(|pair| pair[1].temperature_k > pair[0].temperature_k));
    for point in &fit.curve {
        let model = fit.model.carrier_density_m3(point.temperature_k);
        assert!((point.density_m3 / model - 1.0).abs() < 1e-12);
    }
    // chi-square from the reported normalized residuals.
    let chi: f64 = fit.points.iter().map(|p| p.normalized_residual.unwrap().powi(2)).sum();
    assert!((chi / fit.chi_square - 1.0).abs() < 1e-9);
    for point in &fit.points {
        assert!((point.model_density_m3 / point.density_m3 - point.residual_ln.exp()).abs() < 1e-12);
    }
    // Net density and the dopant/compensating pair are consistent.
    assert!(
        (fit.dopant_density_m3 - fit.compensating_density_m3 - fit.net_density_m3).abs() < 1e-9 * fit.net_density_m3
    );
    assert!((fit.compensation_ratio - fit.compensating_density_m3 / fit.dopant_density_m3).abs() < 1e-12);
    // The covariance's diagonal is the squared uncertainties.
    assert!((fit.covariance[2][2].sqrt() / fit.ionization_energy_ev_unc.unwrap() - 1.0).abs() < 1e-12);
    assert!((fit.covariance[0][0].sqrt() / fit.dopant_density_m3_unc.unwrap() - 1.0).abs() < 1e-12);
    assert_eq!(fit.degeneracy, 4.0);
    // The points' order does not matter.
    let mut reversed = points.clone();
    reversed.reverse();
    let again = fit_freeze_out(&reversed, &settings).unwrap();
    assert!((again.ionization_energy_ev - fit.ionization_energy_ev).abs() < 1e-9);
}

#[test]
fn temperature_range_restricts_the_points() {
    let case = case("Si:P range", Material::silicon(), CarrierType::N, 1e15, 0.05, 0.045);
    let points = case.points();
    let all = fit_freeze_out(&points, &case.settings()).unwrap();
    // Leave out the five coldest points: the rest still span freeze-out and saturation.
    let cut = points[5].temperature_k;
    let mut settings = case.settings();
    settings.temperature_range_k = Some((cut, 1000.0));
    let part = fit_freeze_out(&points, &settings).unwrap();
    assert_eq!(part.points.len(), 25);
    assert!(part.points.iter().all(|p| p.temperature_k >= cut));
    assert_eq!(all.points.len(), 30);
    assert_recovered(&case, &part);
}

#[test]
fn an_uncompensated_series_puts_the_compensation_on_its_bound_and_says_so() {
    // N_A = 1e-7 N_D, far below the smallest compensation the fit allows (1e-6), and the
    // series stops at 25 K, where n is still above 1e3 N_A: the data prefer the bound, the
    // compensating density is not determined, and a warning says so.
    let mut case = case("Si:P pure", Material::silicon(), CarrierType::N, 1e15, 1e-7, 0.045);
    case.seed = 12;
    let majority = case.dopant_cm3 * CM3;
    let mut rng = Rng::seeded(3);
    let points: Vec<DensityPoint> = (0..25)
        .map(|k| {
            let temperature_k = 25.0 * (300.0f64 / 25.0).powf(k as f64 / 24.0);
            let density = case.density(temperature_k) * (0.01 * rng.standard_normal()).exp();
            DensityPoint {
                temperature_k,
                density_m3: density,
                density_unc_m3: Some(0.01 * density),
                carrier_type: Some(CarrierType::N),
                ..DensityPoint::default()
            }
        })
        .collect();
    let fit = fit_freeze_out(&points, &case.settings()).unwrap();
    assert_eq!(fit.at_bound, vec!["compensation ratio"]);
    assert_eq!(fit.compensating_density_m3_unc, None);
    assert!((fit.compensation_ratio - 1e-6).abs() < 1e-12);
    assert!(fit
        .warnings
        .iter()
        .any(|w| w.contains("compensation ratio ended on its lower bound")));
    // Energy and donor density are still recovered (the uncompensated regime shows E_D / 2).
    assert!((fit.ionization_energy_ev / 0.045 - 1.0).abs() < 0.05);
    assert!((fit.dopant_density_m3 / majority - 1.0).abs() < 0.05);
    assert!(fit.ionization_energy_ev_unc.is_some());
}

fn simple_points(count: usize) -> Vec<DensityPoint> {
    (0..count)
        .map(|k| DensityPoint {
            temperature_k: 20.0 + 20.0 * k as f64,
            density_m3: 1e20 * (1.0 + k as f64),
            density_unc_m3: None,
            carrier_type: Some(CarrierType::N),
            ..DensityPoint::default()
        })
        .collect()
}

#[test]
fn refuses_every_kind_of_bad_input() {
    let settings = FreezeOutSettings::default();
    let series_error = |points: &[DensityPoint], settings: &FreezeOutSettings| match fit_freeze_out(points, settings) {
        Err(FreezeOutError::Series(error)) => error,
        other => panic!("expected a series error, got {other:?}"),
    };
    // Too few temperatures: three points, and five points at three temperatures.
    assert_eq!(
        series_error(&simple_points(3), &settings),
        SeriesError::TooFewTemperatures { count: 3, required: 4 }
    );
    let mut repeated = simple_points(3);
    repeated.extend(simple_points(2));
    assert_eq!(
        series_error(&repeated, &settings),
        SeriesError::TooFewTemperatures { count: 3, required: 4 }
    );
    assert_eq!(series_error(&[], &settings), SeriesError::NoPoints);
    // Carrier type switching within the series (holes appear at 100 K).
    let mut switching = simple_points(6);
    switching[4].carrier_type = Some(CarrierType::P);
    assert!(matches!(
        series_error(&switching, &settings),
        SeriesError::CarrierTypeSwitch {
            index: 4,
            first: CarrierType::N,
            then: CarrierType::P,
            ..
        }
    ));
    // ... but a range on one side of the switch is fine.
    let below = FreezeOutSettings {
        temperature_range_k: Some((1.0, 90.0)),
        ..FreezeOutSettings::default()
    };
    assert!(!matches!(
        fit_freeze_out(&switching, &below),
        Err(FreezeOutError::Series(SeriesError::CarrierTypeSwitch { .. }))
    ));
    let mismatch = FreezeOutSettings {
        carrier_type: Some(CarrierType::P),
        ..FreezeOutSettings::default()
    };
    assert!(matches!(
        series_error(&simple_points(6), &mismatch),
        SeriesError::CarrierTypeMismatch { .. }
    ));
    let mut unknown = simple_points(6);
    unknown.iter_mut().for_each(|p| p.carrier_type = None);
    assert_eq!(series_error(&unknown, &settings), SeriesError::CarrierTypeUnknown);
    // Non-positive and non-finite densities and temperatures, bad uncertainties.
    let with = |index: usize, change: &dyn Fn(&mut DensityPoint)| {
        let mut points = simple_points(6);
        change(&mut points[index]);
        points
    };
    assert!(matches!(
        series_error(&with(2, &|p| p.density_m3 = 0.0), &settings),
        SeriesError::NonPositiveDensity { index: 2, .. }
    ));
    assert!(matches!(
        series_error(&with(1, &|p| p.density_m3 = -3e20), &settings),
        SeriesError::NonPositiveDensity { index: 1, .. }
    ));
    assert!(matches!(
        series_error(&with(3, &|p| p.density_m3 = f64::NAN), &settings),
        SeriesError::NonFiniteDensity { index: 3, .. }
    ));
    assert!(matches!(
        series_error(&with(0, &|p| p.temperature_k = 0.0), &settings),
        SeriesError::NonPositiveTemperature { index: 0, .. }
    ));
    assert!(matches!(
        series_error(&with(5, &|p| p.temperature_k = f64::INFINITY), &settings),
        SeriesError::NonFiniteTemperature { index: 5, .. }
    ));
    assert!(matches!(
        series_error(&with(4, &|p| p.density_unc_m3 = Some(0.0)), &settings),
        SeriesError::InvalidUncertainty { index: 4, .. }
    ));
    assert_eq!(
        series_error(&with(4, &|p| p.density_unc_m3 = Some(1e18)), &settings),
        SeriesError::MixedUncertainties { with: 1, without: 5 }
    );
    // A range that excludes every point, and one that is not a range.
    let outside = FreezeOutSettings {
        temperature_range_k: Some((500.0, 600.0)),
        ..FreezeOutSettings::default()
    };
    assert!(matches!(
        series_error(&simple_points(6), &outside),
        SeriesError::RangeExcludesAllData {
            data_min_k: 20.0,
            data_max_k: 120.0,
            ..
        }
    ));
    let reversed = FreezeOutSettings {
        temperature_range_k: Some((100.0, 50.0)),
        ..FreezeOutSettings::default()
    };
    assert!(matches!(
        series_error(&simple_points(6), &reversed),
        SeriesError::InvalidRange { .. }
    ));
    // Hall factors.
    for hall_factor in [
        HallFactor::Constant(-1.0),
        HallFactor::Constant(f64::NAN),
        HallFactor::ScatteringExponent(-2.0),
    ] {
        let bad = FreezeOutSettings {
            hall_factor,
            ..FreezeOutSettings::default()
        };
        assert!(matches!(
            series_error(&simple_points(6), &bad),
            SeriesError::InvalidHallFactor { .. }
        ));
    }
    // Settings.
    let bad_settings = [
        FreezeOutSettings {
            ionization_energy_bounds_ev: (0.2, 0.1),
            ..FreezeOutSettings::default()
        },
        FreezeOutSettings {
            compensation_bounds: (0.1, 1.0),
            ..FreezeOutSettings::default()
        },
        FreezeOutSettings {
            degeneracy: Some(0.0),
            ..FreezeOutSettings::default()
        },
        FreezeOutSettings {
            curve_points: 1,
            ..FreezeOutSettings::default()
        },
        FreezeOutSettings {
            derive_starts_from_data: false,
            grid_search: false,
            ..FreezeOutSettings::default()
        },
        FreezeOutSettings {
            initial_guesses: vec![InitialGuess {
                dopant_density_m3: 1e20,
                compensating_density_m3: 2e20,
                ionization_energy_ev: 0.04,
            }],
            ..FreezeOutSettings::default()
        },
    ];
    for bad in bad_settings {
        assert!(matches!(
            fit_freeze_out(&simple_points(6), &bad),
            Err(FreezeOutError::InvalidSetting { .. })
        ));
    }
    let mut bad_material = FreezeOutSettings::default();
    bad_material.material.conduction_dos_300k_m3 = -1.0;
    assert!(matches!(
        fit_freeze_out(&simple_points(6), &bad_material),
        Err(FreezeOutError::Material(_))
    ));
    // Messages say what to change and end without a period.
    let errors: Vec<String> = [
        SeriesError::TooFewTemperatures { count: 3, required: 4 }.to_string(),
        SeriesError::CarrierTypeSwitch {
            index: 4,
            temperature_k: 100.0,
            first: CarrierType::N,
            then: CarrierType::P,
        }
        .to_string(),
        SeriesError::RangeExcludesAllData {
            min_k: 500.0,
            max_k: 600.0,
            data_min_k: 20.0,
            data_max_k: 120.0,
        }
        .to_string(),
        FreezeOutError::Undetermined {
            parameters: vec!["compensation ratio"],
        }
        .to_string(),
    ]
    .to_vec();
    for message in errors {
        assert!(!message.ends_with('.'), "{message}");
        assert!(
            message.contains("give")
                || message.contains("restrict")
                || message.contains("widen")
                || message.contains("extend"),
            "{message}"
        );
    }
}

#[test]
fn carrier_type_parses_and_prints() {
    assert_eq!(CarrierType::parse("n"), Some(CarrierType::N));
    assert_eq!(CarrierType::parse(" P "), Some(CarrierType::P));
    assert_eq!(CarrierType::parse("holes"), Some(CarrierType::P));
    assert_eq!(CarrierType::parse("x"), None);
    assert_eq!(CarrierType::N.to_string(), "n");
    assert_eq!(CarrierType::P.default_degeneracy(), 4.0);
}
