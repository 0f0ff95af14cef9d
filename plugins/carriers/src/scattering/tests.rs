//! Tests of the scattering model and fit: check values of the formulas, the analytic
//! Jacobian against differences, recovery of known parameters from synthetic data (several
//! materials, doping levels and model options), the freeze-out comparison on data from
//! core's forward model, and every refusal.

use super::*;
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::mobility::ScatteringMedium;
use mobilis_physics::forward::statistics::{BandModel, Dopants};
use mobilis_physics::forward::transport::{n_type_transport, MobilityModel};

const CM2: f64 = 1e-4; // cm^2/(V s) to m^2/(V s)
const CM3: f64 = 1e6; // cm^-3 to m^-3

/// A check value printed to a limited number of digits agrees when the difference is within
/// half a unit of its last printed digit.
fn matches_printed(actual: f64, printed: f64, last_digit: f64) -> bool {
    (actual - printed).abs() <= 0.5 * last_digit * (1.0 + 1e-9)
}

fn silicon_electrons() -> ScatteringMedium {
    medium_for(&Material::silicon(), CarrierType::N)
}

fn parameters(mu_300: f64, alpha: f64, ionized: f64) -> ScatteringParameters {
    ScatteringParameters {
        lattice_mobility_300k_m2_per_vs: mu_300,
        lattice_exponent: alpha,
        ionized_density_m3: ionized,
        neutral_density_m3: None,
        constant_mobility_m2_per_vs: None,
    }
}

// ---------------------------------------------------------------------------------------
// Check values

// Practical forms (Chattopadhyay and Queisser, Rev. Mod. Phys. 53, 745, 1981, as the
// review): Si, m* 0.26, eps_r 11.7, 300 K, n' = N_I: 1e17 cm^-3: CW 8781.5, BH 9407.6;
// 1e18: CW 1237.2, BH 1749.2 cm^2/Vs; computed from the Brooks-Herring and
// Conwell-Weisskopf formulas with CODATA 2018 constants.
#[test]
fn ionized_impurity_terms_match_the_silicon_check_values() {
    for (density_cm3, conwell_weisskopf, brooks_herring) in [(1e17, 8781.5, 9407.6), (1e18, 1237.2, 1749.2)] {
        for (formula, expected) in [
            (IonizedImpurityFormula::ConwellWeisskopf, conwell_weisskopf),
            (IonizedImpurityFormula::BrooksHerring, brooks_herring),
        ] {
            let settings = ScatteringSettings {
                formula,
                screening: ScreeningDensity::ImpurityDensity,
                ..ScatteringSettings::new(silicon_electrons())
            };
            let terms = evaluate_model(&settings, &parameters(0.1448, 2.33, density_cm3 * CM3), 300.0, None)
                .expect("no carrier density needed");
            assert!(
                matches_printed(terms.ionized / CM2, expected, 0.1),
                "{formula:?} at {density_cm3:e}: {}",
                terms.ionized / CM2
            );
            assert_eq!(terms.ionized_density_m3, density_cm3 * CM3);
        }
    }
}

// Matthiessen's rule 1/mu = sum 1/mu_i: 1400 and 700 cm^2/Vs give 466.667 (computed from
// it); here as a lattice term at 300 K and the constant term, without impurities.
#[test]
fn matthiessen_sum_of_lattice_and_constant_terms() {
    let settings = ScatteringSettings {
        constant_term: true,
        ..ScatteringSettings::new(silicon_electrons())
    };
    let parameters = ScatteringParameters {
        constant_mobility_m2_per_vs: Some(700.0 * CM2),
        ..parameters(1400.0 * CM2, 2.33, 0.0)
    };
    let terms = evaluate_model(&settings, &parameters, 300.0, None).unwrap();
    assert!(
        matches_printed(terms.total / CM2, 466.667, 0.001),
        "{}",
        terms.total / CM2
    );
    assert_eq!(terms.ionized, f64::INFINITY);
    assert_eq!(terms.neutral, f64::INFINITY);
    // Without the constant term in the settings its value is ignored.
    let lattice_only = evaluate_model(&ScatteringSettings::new(silicon_electrons()), &parameters, 300.0, None).unwrap();
    assert!((lattice_only.total / (1400.0 * CM2) - 1.0).abs() < 1e-14);
}

// The effective Bohr radius for m* = m0 and eps_r = 1 is the Bohr radius, 5.29177210903e-11 m
// (CODATA 2018, value recalled from memory).
#[test]
fn effective_bohr_radius_reduces_to_the_bohr_radius() {
    let vacuum = ScatteringMedium {
        effective_mass_ratio: 1.0,
        relative_permittivity: 1.0,
    };
    assert!((effective_bohr_radius_m(&vacuum) / 5.291_772_109_03e-11 - 1.0).abs() < 1e-8);
    // a_B* scales as eps_r / (m*/m0): 45 times larger in silicon's conduction band.
    let silicon = effective_bohr_radius_m(&silicon_electrons());
    assert!((silicon / effective_bohr_radius_m(&vacuum) - 11.7 / 0.26).abs() < 1e-9);
}

// Erginsoy's formula in practical units, mu_N = 1.44e22 (m*/m0) / (eps_r N_N) cm^2/Vs with N_N
// in cm^-3 (from memory; it follows from e^3 m0 / (80 pi eps_0 hbar^3)).
#[test]
fn erginsoy_mobility_matches_its_practical_form() {
    let medium = ScatteringMedium {
        effective_mass_ratio: 1.0,
        relative_permittivity: 1.0,
    };
    let prefactor_cm = neutral_impurity_mobility_m2_per_vs(&medium, 1.0 * CM3) / CM2;
    assert!((prefactor_cm / 1.44e22 - 1.0).abs() < 5e-3, "{prefactor_cm:e}");
    // Si electrons at N_N = 1e17 cm^-3: 1.4356e22 x 0.26 / 11.7 / 1e17 = 3190 cm^2/Vs.
    let silicon = neutral_impurity_mobility_m2_per_vs(&silicon_electrons(), 1e17 * CM3) / CM2;
    assert!((silicon / (prefactor_cm * 0.26 / 11.7 / 1e17) - 1.0).abs() < 1e-12);
    assert!(silicon > 3100.0 && silicon < 3300.0, "{silicon}");
    assert_eq!(neutral_impurity_mobility_m2_per_vs(&medium, 0.0), f64::INFINITY);
    // Independent of temperature in the model.
    let settings = ScatteringSettings {
        neutral: NeutralImpurityModel::FittedConstant,
        ..ScatteringSettings::new(silicon_electrons())
    };
    let with_neutral = ScatteringParameters {
        neutral_density_m3: Some(1e17 * CM3),
        ..parameters(0.1448, 2.33, 1e21)
    };
    let cold = evaluate_model(&settings, &with_neutral, 20.0, None).unwrap();
    let hot = evaluate_model(&settings, &with_neutral, 400.0, None).unwrap();
    assert_eq!(cold.neutral, hot.neutral);
    assert!((cold.neutral / CM2 - silicon).abs() < 1e-9 * silicon);
}

// Brooks' compensated screening density n + (n + N_A)(N_D - N_A - n)/N_D (the form core's
// full statistics reduce to; recalled from memory of Brooks' result).
#[test]
fn brooks_compensated_screening_density() {
    let (donors, acceptors) = (1e22, 1e21);
    // Deep freeze-out: n -> 0 leaves the partly filled donors, N_A (N_D - N_A) / N_D.
    assert!((brooks_screening_density_m3(0.0, donors, acceptors) - 0.9e21).abs() < 1e6);
    // Full ionization: n = N_D - N_A and only the free carriers screen.
    assert_eq!(brooks_screening_density_m3(9e21, donors, acceptors), 9e21);
    assert_eq!(brooks_screening_density_m3(9.5e21, donors, acceptors), 9.5e21);
    let n = 1e21;
    let expected = n + (n + acceptors) * (donors - acceptors - n) / donors;
    assert!((brooks_screening_density_m3(n, donors, acceptors) / expected - 1.0).abs() < 1e-14);
    // Core's full statistics give the same screening density in n-type silicon, where holes
    // and the acceptors' occupancy do not count.
    let dopants = Dopants::new(3e15 * CM3, 2e14 * CM3, 0.045, 0.045);
    for temperature_k in [25.0, 50.0, 100.0, 300.0] {
        let state = mobilis_physics::forward::statistics::solve_charge_neutrality(
            &dopants,
            &BandModel::silicon(),
            temperature_k,
        )
        .unwrap();
        let brooks = brooks_screening_density_m3(state.electron_density_m3, 3e15 * CM3, 2e14 * CM3);
        assert!(
            (brooks / state.screening_density_m3 - 1.0).abs() < 1e-6,
            "{temperature_k} K: {brooks:e} against {:e}",
            state.screening_density_m3
        );
    }
}

// ---------------------------------------------------------------------------------------
// Jacobian

/// Every model option with a point that has a carrier density and one that needs none.
fn jacobian_cases() -> Vec<(ScatteringSettings, Vec<f64>)> {
    let base = ScatteringSettings::new(silicon_electrons());
    let compensated = ScreeningDensity::Compensated {
        dopant_density_m3: 3e21,
        compensating_density_m3: 2e20,
    };
    vec![
        (base, vec![0.1448f64.ln(), 2.33, 1e22f64.ln()]),
        (
            ScatteringSettings {
                screening: ScreeningDensity::ImpurityDensity,
                ..base
            },
            vec![0.1448f64.ln(), 2.33, 1e23f64.ln()],
        ),
        (
            ScatteringSettings {
                formula: IonizedImpurityFormula::ConwellWeisskopf,
                constant_term: true,
                ..base
            },
            vec![0.1448f64.ln(), 2.1, 3e22f64.ln(), 0.5f64.ln()],
        ),
        (
            ScatteringSettings {
                ionized_density: IonizedDensityModel::CarriersPlusCompensation,
                screening: compensated,
                neutral: NeutralImpurityModel::FittedConstant,
                ..base
            },
            vec![0.1448f64.ln(), 2.6, 2e20f64.ln(), 1e22f64.ln()],
        ),
        (
            ScatteringSettings {
                neutral: NeutralImpurityModel::FromCarrierDensity { net_doping_m3: 2.8e21 },
                constant_term: true,
                ..base
            },
            vec![0.2f64.ln(), 1.8, 5e21f64.ln(), 2.0f64.ln()],
        ),
    ]
}

#[test]
fn analytic_jacobian_matches_central_differences() {
    for (settings, values) in jacobian_cases() {
        let model = Model::new(&settings);
        assert_eq!(model.parameters.len(), values.len());
        for (temperature_k, carriers) in [(25.0, 3e19), (77.0, 1.5e21), (300.0, 2.8e21)] {
            let point = FitPoint {
                index: 0,
                temperature_k,
                ln_mobility: 0.0,
                ln_sigma: 1.0,
                ln_sigma_data: 1.0,
                floored: false,
                temperature_unc_k: 0.0,
                carrier_density_m3: Some(carriers),
            };
            let mut gradient = vec![0.0; values.len()];
            model.log_mobility_gradient(&values, &point, &mut gradient);
            for j in 0..values.len() {
                let step = 1e-5;
                let mut up = values.clone();
                let mut down = values.clone();
                up[j] += step;
                down[j] -= step;
                let difference = (model.log_mobility(&up, &point) - model.log_mobility(&down, &point)) / (2.0 * step);
                assert!(
                    (gradient[j] - difference).abs() <= 1e-7 + 1e-6 * difference.abs(),
                    "{settings:?} T {temperature_k} parameter {j}: {} against {difference}",
                    gradient[j]
                );
            }
        }
    }
}

// ---------------------------------------------------------------------------------------
// Recovery of known parameters from synthetic data

/// Temperatures from `low` to `high` K in steps of `step`.
fn temperatures(low: f64, high: f64, step: f64) -> Vec<f64> {
    let count = ((high - low) / step).round() as usize;
    (0..=count).map(|i| low + step * i as f64).collect()
}

/// Mobilities from the model with Gaussian relative noise; the uncertainties are given when
/// `weighted`.
fn synthetic(
    settings: &ScatteringSettings,
    truth: &ScatteringParameters,
    temperatures: &[f64],
    carriers: impl Fn(f64) -> Option<f64>,
    relative_noise: f64,
    weighted: bool,
    seed: u64,
) -> Vec<MobilityPoint> {
    let mut rng = Rng::seeded(seed);
    temperatures
        .iter()
        .map(|&temperature_k| {
            let carrier_density_m3 = carriers(temperature_k);
            let exact = evaluate_model(settings, truth, temperature_k, carrier_density_m3)
                .unwrap()
                .total;
            let mobility = exact * (1.0 + relative_noise * rng.standard_normal());
            MobilityPoint {
                temperature_k,
                mobility_m2_per_vs: mobility * settings.hall_factor,
                mobility_unc_m2_per_vs: weighted.then_some(relative_noise * mobility * settings.hall_factor),
                temperature_unc_k: None,
                carrier_density_m3,
            }
        })
        .collect()
}

/// The estimate lies within `k` of its reported standard uncertainties of the truth, and that
/// uncertainty is finite, positive and below `largest_relative` of the value.
fn assert_recovered(case: &str, what: &str, estimate: Estimate, truth: f64, k: f64, largest_relative: f64) {
    let unc = estimate
        .uncertainty
        .unwrap_or_else(|| panic!("{case}: {what} has no uncertainty"));
    assert!(unc.is_finite() && unc > 0.0, "{case}: {what} uncertainty {unc}");
    assert!(
        (estimate.value - truth).abs() <= k * unc,
        "{case}: {what} = {:e} +- {:e}, truth {truth:e} ({:.2} sigma)",
        estimate.value,
        unc,
        (estimate.value - truth).abs() / unc
    );
    assert!(
        unc <= largest_relative * truth.abs(),
        "{case}: {what} uncertainty {unc:e} is more than {largest_relative} of {truth:e}"
    );
}

struct RecoveryCase {
    name: &'static str,
    settings: ScatteringSettings,
    truth: ScatteringParameters,
    temperatures: Vec<f64>,
    /// Carrier density at T, when the data carry one.
    carriers: fn(f64) -> Option<f64>,
    relative_noise: f64,
    weighted: bool,
}

fn no_carriers(_: f64) -> Option<f64> {
    None
}

fn recovery_cases() -> Vec<RecoveryCase> {
    let silicon = Material::silicon();
    let gallium_arsenide = Material::gallium_arsenide();
    let si_n = medium_for(&silicon, CarrierType::N);
    let si_p = medium_for(&silicon, CarrierType::P);
    let gaas_n = medium_for(&gallium_arsenide, CarrierType::N);
    vec![
        // Lightly doped n-Si, Arora's lattice law (1448 (T/300)^-2.33 cm^2/Vs), 1e15 cm^-3.
        RecoveryCase {
            name: "Si n 1e15, Brooks-Herring, n' = N_I",
            settings: ScatteringSettings {
                screening: ScreeningDensity::ImpurityDensity,
                ..ScatteringSettings::new(si_n)
            },
            truth: parameters(0.1448, 2.33, 1e15 * CM3),
            temperatures: temperatures(20.0, 400.0, 10.0),
            carriers: no_carriers,
            relative_noise: 0.02,
            weighted: true,
        },
        // Heavily doped n-Si, 1e17 cm^-3, screened by a measured density 0.9 N_I.
        RecoveryCase {
            name: "Si n 1e17, Brooks-Herring, measured n'",
            settings: ScatteringSettings::new(si_n),
            truth: parameters(0.1448, 2.33, 1e17 * CM3),
            temperatures: temperatures(40.0, 400.0, 15.0),
            carriers: |_| Some(0.9e17 * CM3),
            relative_noise: 0.02,
            weighted: true,
        },
        // Heavily doped p-Si with Conwell-Weisskopf, Arora's hole law 473 (T/300)^-2.23.
        RecoveryCase {
            name: "Si p 3e17, Conwell-Weisskopf",
            settings: ScatteringSettings {
                formula: IonizedImpurityFormula::ConwellWeisskopf,
                ..ScatteringSettings::new(si_p)
            },
            truth: parameters(0.0473, 2.23, 3e17 * CM3),
            temperatures: temperatures(50.0, 400.0, 10.0),
            carriers: no_carriers,
            relative_noise: 0.015,
            weighted: true,
        },
        // n-GaAs, invented lattice law 8500 (T/300)^-2.0 cm^-2/Vs, 2e16 cm^-3, unweighted.
        RecoveryCase {
            name: "GaAs n 2e16, Brooks-Herring, unweighted",
            settings: ScatteringSettings {
                screening: ScreeningDensity::ImpurityDensity,
                ..ScatteringSettings::new(gaas_n)
            },
            truth: parameters(0.85, 2.0, 2e16 * CM3),
            temperatures: temperatures(20.0, 400.0, 10.0),
            carriers: no_carriers,
            relative_noise: 0.02,
            weighted: false,
        },
        // Lightly doped n-GaAs with a temperature-independent term (invented 2e5 cm^2/Vs).
        RecoveryCase {
            name: "GaAs n 3e15 with a constant term",
            settings: ScatteringSettings {
                screening: ScreeningDensity::ImpurityDensity,
                constant_term: true,
                ..ScatteringSettings::new(gaas_n)
            },
            truth: ScatteringParameters {
                constant_mobility_m2_per_vs: Some(20.0),
                ..parameters(0.85, 2.0, 3e15 * CM3)
            },
            temperatures: temperatures(10.0, 400.0, 5.0),
            carriers: no_carriers,
            relative_noise: 0.01,
            weighted: true,
        },
        // n-Si with neutral-impurity scattering (5e16 cm^-3 neutral, 1e15 cm^-3 charged).
        RecoveryCase {
            name: "Si n with neutral impurities",
            settings: ScatteringSettings {
                screening: ScreeningDensity::ImpurityDensity,
                neutral: NeutralImpurityModel::FittedConstant,
                ..ScatteringSettings::new(si_n)
            },
            truth: ScatteringParameters {
                neutral_density_m3: Some(5e16 * CM3),
                ..parameters(0.1448, 2.33, 1e15 * CM3)
            },
            temperatures: temperatures(15.0, 400.0, 5.0),
            carriers: no_carriers,
            relative_noise: 0.01,
            weighted: true,
        },
    ]
}

#[test]
fn recovers_known_parameters_from_noisy_synthetic_data() {
    for (seed, case) in recovery_cases().into_iter().enumerate() {
        let points = synthetic(
            &case.settings,
            &case.truth,
            &case.temperatures,
            case.carriers,
            case.relative_noise,
            case.weighted,
            1000 + seed as u64,
        );
        let fit = fit_mobility_scattering(&points, &case.settings, None)
            .unwrap_or_else(|error| panic!("{}: {error}", case.name));
        let name = case.name;
        assert_recovered(
            name,
            "mu_300",
            fit.lattice_mobility_300k_m2_per_vs,
            case.truth.lattice_mobility_300k_m2_per_vs,
            3.0,
            0.1,
        );
        assert_recovered(
            name,
            "alpha",
            fit.lattice_exponent,
            case.truth.lattice_exponent,
            3.0,
            0.1,
        );
        assert_recovered(
            name,
            "N_I",
            fit.ionized_impurity_density_m3,
            case.truth.ionized_density_m3,
            3.0,
            0.35,
        );
        if let Some(truth) = case.truth.neutral_density_m3 {
            assert_recovered(name, "N_N", fit.neutral_impurity_density_m3.unwrap(), truth, 3.0, 0.5);
        }
        if let Some(truth) = case.truth.constant_mobility_m2_per_vs {
            assert_recovered(name, "mu_C", fit.constant_mobility_m2_per_vs.unwrap(), truth, 3.0, 0.5);
        }
        // The noise is what the model leaves: chi^2/nu near 1 (weighted) and an rms
        // residual near the noise level.
        assert!(
            fit.goodness.reduced_chi_square > 0.4 && fit.goodness.reduced_chi_square < 2.0 || !case.weighted,
            "{name}: chi^2/nu {}",
            fit.goodness.reduced_chi_square
        );
        assert!(
            fit.goodness.rms_log_residual < 2.0 * case.relative_noise
                && fit.goodness.rms_log_residual > 0.4 * case.relative_noise,
            "{name}: rms {}",
            fit.goodness.rms_log_residual
        );
        assert_eq!(fit.goodness.weighted, case.weighted);
        assert_eq!(fit.points_used, case.temperatures.len());
        assert!(fit.converged_starts >= 1 && fit.same_minimum_starts >= 1);
        assert!(fit.warnings.is_empty(), "{name}: {:?}", fit.warnings);
        // The table: one row per point, every term present where the model has it, and the
        // terms combining to the fit.
        assert_eq!(fit.rows.len(), points.len());
        for row in &fit.rows {
            let inverse_sum = 1.0 / row.mobility_lattice.unwrap()
                + 1.0 / row.mobility_ionized.unwrap()
                + row.mobility_neutral.map_or(0.0, |mu| 1.0 / mu)
                + row.mobility_constant.map_or(0.0, |mu| 1.0 / mu);
            assert!((row.mobility_fit.unwrap() * inverse_sum - 1.0).abs() < 1e-12);
            assert_eq!(row.mobility_neutral.is_some(), case.truth.neutral_density_m3.is_some());
            assert_eq!(
                row.mobility_constant.is_some(),
                case.truth.constant_mobility_m2_per_vs.is_some()
            );
            assert!(row.in_fit_range);
        }
    }
}

// The Hall factor divides the data: Hall mobilities r_H times the drift ones, fitted with
// hall_factor = r_H, give the drift fit's parameters. 3 pi / 8 is the acoustic-phonon Hall
// factor (Putley 1960).
#[test]
fn hall_factor_turns_hall_mobilities_into_drift_mobilities() {
    let drift_settings = ScatteringSettings::new(silicon_electrons());
    let hall_settings = ScatteringSettings {
        hall_factor: 3.0 * PI / 8.0,
        ..drift_settings
    };
    let truth = parameters(0.1448, 2.33, 5e21);
    let temperatures = temperatures(30.0, 400.0, 10.0);
    let drift = synthetic(&drift_settings, &truth, &temperatures, |_| Some(4e21), 0.01, true, 7);
    let hall = synthetic(&hall_settings, &truth, &temperatures, |_| Some(4e21), 0.01, true, 7);
    for (d, h) in drift.iter().zip(&hall) {
        assert!((h.mobility_m2_per_vs / d.mobility_m2_per_vs - 3.0 * PI / 8.0).abs() < 1e-12);
    }
    let drift_fit = fit_mobility_scattering(&drift, &drift_settings, None).unwrap();
    let hall_fit = fit_mobility_scattering(&hall, &hall_settings, None).unwrap();
    for (a, b) in [
        (
            drift_fit.lattice_mobility_300k_m2_per_vs,
            hall_fit.lattice_mobility_300k_m2_per_vs,
        ),
        (drift_fit.lattice_exponent, hall_fit.lattice_exponent),
        (
            drift_fit.ionized_impurity_density_m3,
            hall_fit.ionized_impurity_density_m3,
        ),
    ] {
        assert!((a.value / b.value - 1.0).abs() < 1e-6, "{a:?} {b:?}");
    }
    assert!((hall_fit.rows[0].mobility_data / drift.first().unwrap().mobility_m2_per_vs - 1.0).abs() < 1e-12);
    // Taken as drift mobilities, the same Hall data give a smaller N_I (module documentation).
    let naive = fit_mobility_scattering(&hall, &drift_settings, None).unwrap();
    assert!(naive.ionized_impurity_density_m3.value < 0.9 * drift_fit.ionized_impurity_density_m3.value);
}

#[test]
fn fixed_exponent_and_temperature_range() {
    let settings = ScatteringSettings {
        screening: ScreeningDensity::ImpurityDensity,
        ..ScatteringSettings::new(silicon_electrons())
    };
    let truth = parameters(0.1448, 2.33, 1e22);
    let points = synthetic(
        &settings,
        &truth,
        &temperatures(20.0, 400.0, 20.0),
        no_carriers,
        0.01,
        true,
        11,
    );
    let restricted = ScatteringSettings {
        temperature_min_k: Some(60.0),
        temperature_max_k: Some(300.0),
        fixed_lattice_exponent: Some(2.33),
        ..settings
    };
    let fit = fit_mobility_scattering(&points, &restricted, None).unwrap();
    assert!(fit.lattice_exponent_fixed);
    assert_eq!(fit.lattice_exponent.value, 2.33);
    assert_eq!(fit.lattice_exponent.uncertainty, None);
    assert_eq!(fit.points_used, 13); // 60, 80, ... 300 K
    assert_eq!(fit.goodness.degrees_of_freedom, 13 - 2);
    assert_recovered(
        "fixed alpha",
        "mu_300",
        fit.lattice_mobility_300k_m2_per_vs,
        0.1448,
        3.0,
        0.05,
    );
    assert_recovered("fixed alpha", "N_I", fit.ionized_impurity_density_m3, 1e22, 3.0, 0.3);
    for row in &fit.rows {
        assert_eq!(row.in_fit_range, (60.0..=300.0).contains(&row.temperature_k));
        // Points outside the range are evaluated with the fitted model all the same.
        assert!(row.mobility_fit.is_some() && row.log_residual.is_some());
    }
}

// ---------------------------------------------------------------------------------------
// Data from core's forward model and the comparison with a freeze-out result

/// The invented silicon wafer of the demo scenario: N_D = 3e15, N_A = 2e14 cm^-3,
/// phosphorus 0.045 eV and boron 0.045 eV (Sze-type table values), Levinshtein band edges,
/// the transport model's electron mobility (Arora lattice law, Brooks-Herring on
/// N_D+ + N_A- with the full-statistics screening). Hall data from 20 to 400 K, 1 % noise.
fn forward_model_points(seed: u64) -> Vec<MobilityPoint> {
    let dopants = Dopants::new(3e15 * CM3, 2e14 * CM3, 0.045, 0.045);
    let bands = BandModel::silicon();
    let model = MobilityModel::silicon_electrons();
    let mut rng = Rng::seeded(seed);
    temperatures(20.0, 400.0, 10.0)
        .into_iter()
        .map(|temperature_k| {
            let layer = n_type_transport(&dopants, &bands, 500e-6, temperature_k, &model).unwrap();
            let mobility = layer.mobility_m2_per_vs * (1.0 + 0.01 * rng.standard_normal());
            MobilityPoint {
                temperature_k,
                mobility_m2_per_vs: mobility,
                mobility_unc_m2_per_vs: Some(0.01 * mobility),
                temperature_unc_k: None,
                carrier_density_m3: Some(layer.equilibrium.electron_density_m3),
            }
        })
        .collect()
}

fn freeze_out_result(donors_cm3: f64, acceptors_cm3: f64) -> DopantDensities {
    DopantDensities {
        dopant_density_m3: donors_cm3 * CM3,
        dopant_density_unc_m3: Some(0.05 * donors_cm3 * CM3),
        compensating_density_m3: acceptors_cm3 * CM3,
        compensating_density_unc_m3: Some(0.1 * acceptors_cm3 * CM3),
        covariance_m6: None,
    }
}

#[test]
fn carriers_plus_compensation_recovers_the_acceptors_of_the_forward_model() {
    let points = forward_model_points(21);
    let settings = ScatteringSettings {
        ionized_density: IonizedDensityModel::CarriersPlusCompensation,
        screening: ScreeningDensity::Compensated {
            dopant_density_m3: 3e15 * CM3,
            compensating_density_m3: 2e14 * CM3,
        },
        ..ScatteringSettings::new(silicon_electrons())
    };
    let truth = freeze_out_result(3e15, 2e14);
    let fit = fit_mobility_scattering(&points, &settings, Some(&truth)).unwrap();
    let name = "forward model, n + 2 N_A";
    assert_recovered(name, "N_A", fit.compensating_density_m3.unwrap(), 2e14 * CM3, 3.0, 0.2);
    assert_recovered(name, "mu_300", fit.lattice_mobility_300k_m2_per_vs, 0.1448, 3.0, 0.05);
    assert_recovered(name, "alpha", fit.lattice_exponent, 2.33, 3.0, 0.05);
    assert!(
        fit.goodness.reduced_chi_square < 2.0,
        "{}",
        fit.goodness.reduced_chi_square
    );
    // N_I at 400 K: n + 2 N_A with every donor ionized, N_D + N_A.
    let implied = fit.ionized_impurity_density_m3;
    assert!((implied.value / (3.2e15 * CM3) - 1.0).abs() < 3.0 * implied.uncertainty.unwrap() / implied.value + 0.01);
    let comparison = fit.comparison.unwrap();
    assert_eq!(comparison.basis, ReferenceBasis::CompensatingDensity);
    assert_eq!(comparison.quantity, "compensating_density");
    assert!(comparison.consistent, "{comparison:?}");
    assert!(fit.warnings.is_empty(), "{:?}", fit.warnings);

    // Screening by the free electrons alone misses the partly filled donors that screen at
    // low temperature: the same model then fails the data and N_A.
    let free_screening = ScatteringSettings {
        screening: ScreeningDensity::MeasuredCarriers,
        ..settings
    };
    let poor = fit_mobility_scattering(&points, &free_screening, None).unwrap();
    assert!(
        poor.goodness.reduced_chi_square > 10.0,
        "{}",
        poor.goodness.reduced_chi_square
    );
    let ratio = poor.compensating_density_m3.unwrap().value / (2e14 * CM3);
    assert!(ratio < 0.5, "{ratio}");
    assert!(poor
        .warnings
        .iter()
        .any(|warning| warning.contains("reduced chi-square")));

    // A freeze-out result with five times the acceptors is flagged.
    let wrong = freeze_out_result(3e15, 1e15);
    let flagged = fit_mobility_scattering(&points, &settings, Some(&wrong)).unwrap();
    let comparison = flagged.comparison.unwrap();
    assert!(!comparison.consistent && comparison.ratio < 0.3, "{comparison:?}");
    assert!(flagged
        .warnings
        .iter()
        .any(|warning| warning.contains("compensating density")));
}

#[test]
fn constant_density_fit_is_compared_with_the_ionized_density_at_its_temperatures() {
    let points = forward_model_points(22);
    let settings = ScatteringSettings {
        screening: ScreeningDensity::Compensated {
            dopant_density_m3: 3e15 * CM3,
            compensating_density_m3: 2e14 * CM3,
        },
        ..ScatteringSettings::new(silicon_electrons())
    };
    let truth = freeze_out_result(3e15, 2e14);
    let fit = fit_mobility_scattering(&points, &settings, Some(&truth)).unwrap();
    let comparison = fit.comparison.unwrap();
    assert_eq!(comparison.basis, ReferenceBasis::IonizedAtFitTemperatures);
    // The reference lies between 2 N_A (deep freeze-out) and N_D + N_A.
    assert!(comparison.reference.value > 4e14 * CM3 && comparison.reference.value < 3.2e15 * CM3);
    assert!(comparison.consistent, "{comparison:?}");
    // The total N_D + N_A would not be: the constant N_I is set where the donors freeze out.
    let total = compare_densities(
        "ionized_impurity_density",
        fit.ionized_impurity_density_m3,
        truth.total_impurity_density_m3(),
        ReferenceBasis::TotalImpurities,
        &ConsistencyTolerance::default(),
    );
    assert!(!total.consistent, "{total:?}");
    // Without carrier densities the fit can only compare with the total.
    let no_carriers: Vec<MobilityPoint> = points
        .iter()
        .map(|point| MobilityPoint {
            carrier_density_m3: None,
            ..*point
        })
        .collect();
    let without = fit_mobility_scattering(
        &no_carriers,
        &ScatteringSettings::new(silicon_electrons()),
        Some(&truth),
    )
    .unwrap();
    assert_eq!(without.comparison.unwrap().basis, ReferenceBasis::TotalImpurities);
}

#[test]
fn reference_uncertainty_follows_the_freeze_out_uncertainties() {
    let points = forward_model_points(23);
    let settings = ScatteringSettings::new(silicon_electrons());
    let fit = fit_mobility_scattering(&points, &settings, None).unwrap();
    let independent = freeze_out_result(3e15, 2e14);
    let base = compare_with_freeze_out(&fit, &independent, &ConsistencyTolerance::default()).unwrap();
    // n + 2 N_A: where uncapped, the reference moves by 2 dN_A; a larger N_A uncertainty
    // gives a larger reference uncertainty, a larger N_D uncertainty changes it little.
    let wider_acceptors = DopantDensities {
        compensating_density_unc_m3: Some(0.3 * 2e14 * CM3),
        ..independent
    };
    let wider = compare_with_freeze_out(&fit, &wider_acceptors, &ConsistencyTolerance::default()).unwrap();
    let ratio = wider.reference.uncertainty.unwrap() / base.reference.uncertainty.unwrap();
    assert!(ratio > 2.0 && ratio < 3.0 + 1e-9, "{ratio}");
    // Without uncertainties on the freeze-out side there is none on the reference.
    let bare = DopantDensities {
        dopant_density_unc_m3: None,
        compensating_density_unc_m3: None,
        ..independent
    };
    assert_eq!(
        compare_with_freeze_out(&fit, &bare, &ConsistencyTolerance::default())
            .unwrap()
            .reference
            .uncertainty,
        None
    );
}

// ---------------------------------------------------------------------------------------
// Refusals

fn good_points() -> Vec<MobilityPoint> {
    let settings = ScatteringSettings::new(silicon_electrons());
    synthetic(
        &settings,
        &parameters(0.1448, 2.33, 1e22),
        &temperatures(50.0, 300.0, 50.0),
        |_| None,
        0.01,
        true,
        3,
    )
}

#[test]
fn refuses_bad_input_with_a_message_that_says_what_to_change() {
    let settings = ScatteringSettings::new(silicon_electrons());
    let fit = |points: &[MobilityPoint], settings: &ScatteringSettings| {
        fit_mobility_scattering(points, settings, None).unwrap_err()
    };
    let with = |index: usize, change: &dyn Fn(&mut MobilityPoint)| {
        let mut points = good_points();
        change(&mut points[index]);
        points
    };

    let error = fit(&good_points()[..3], &settings);
    assert_eq!(
        error,
        ScatteringError::TooFewPoints {
            points: 3,
            parameters: 3
        }
    );
    assert!(error.to_string().contains("give at least 4 points"));
    assert!(matches!(
        fit(&[], &settings),
        ScatteringError::TooFewPoints { points: 0, .. }
    ));

    for bad in [f64::NAN, 0.0, -20.0, f64::INFINITY] {
        let error = fit(&with(2, &|p| p.temperature_k = bad), &settings);
        assert!(
            matches!(error, ScatteringError::InvalidTemperature { index: 2, .. }),
            "{error}"
        );
    }
    for bad in [f64::NAN, 0.0, -0.1, f64::INFINITY] {
        let error = fit(&with(4, &|p| p.mobility_m2_per_vs = bad), &settings);
        assert!(
            matches!(error, ScatteringError::InvalidMobility { index: 4, .. }),
            "{error}"
        );
        // Outside the range the same point is left out instead.
        let skipped = ScatteringSettings {
            temperature_max_k: Some(260.0),
            ..settings
        };
        let points = with(5, &|p| p.mobility_m2_per_vs = bad);
        let fit = fit_mobility_scattering(&points, &skipped, None).unwrap();
        assert!(!fit.rows[5].in_fit_range && fit.rows[5].log_residual.is_none());
    }
    let error = fit(&with(1, &|p| p.mobility_unc_m2_per_vs = Some(-1.0)), &settings);
    assert!(matches!(
        error,
        ScatteringError::InvalidMobilityUncertainty { index: 1, .. }
    ));
    let error = fit(&with(1, &|p| p.mobility_unc_m2_per_vs = None), &settings);
    assert_eq!(error, ScatteringError::MixedUncertainties { with: 5, without: 1 });
    let error = fit(&with(0, &|p| p.carrier_density_m3 = Some(-1.0)), &settings);
    assert!(matches!(error, ScatteringError::InvalidCarrierDensity { index: 0, .. }));

    let error = fit(
        &good_points(),
        &ScatteringSettings {
            temperature_min_k: Some(500.0),
            ..settings
        },
    );
    assert!(matches!(error, ScatteringError::RangeExcludesAllData { .. }), "{error}");
    assert!(error.to_string().contains("50 K to 300 K; widen the range"), "{error}");

    let error = fit(
        &good_points(),
        &ScatteringSettings {
            ionized_density: IonizedDensityModel::CarriersPlusCompensation,
            ..settings
        },
    );
    assert!(
        matches!(error, ScatteringError::MissingCarrierDensity { index: 0, .. }),
        "{error}"
    );

    let error = fit(
        &good_points(),
        &ScatteringSettings {
            neutral: NeutralImpurityModel::FittedConstant,
            constant_term: true,
            ..settings
        },
    );
    assert!(matches!(error, ScatteringError::IndistinguishableTerms(_)), "{error}");

    for (broken, setting) in [
        (
            ScatteringSettings {
                hall_factor: 0.0,
                ..settings
            },
            "hall_factor",
        ),
        (
            ScatteringSettings {
                medium: ScatteringMedium {
                    effective_mass_ratio: f64::NAN,
                    relative_permittivity: 11.7,
                },
                ..settings
            },
            "effective_mass_ratio",
        ),
        (
            ScatteringSettings {
                fixed_lattice_exponent: Some(9.0),
                ..settings
            },
            "lattice_exponent",
        ),
        (
            ScatteringSettings {
                tolerance: ConsistencyTolerance {
                    sigma_multiple: 0.0,
                    model_relative_uncertainty: 0.3,
                },
                ..settings
            },
            "consistency_sigma_multiple",
        ),
    ] {
        let error = fit(&good_points(), &broken);
        assert!(
            matches!(error, ScatteringError::InvalidSetting { setting: s, .. } if s == setting),
            "{error}"
        );
        assert!(!error.to_string().ends_with('.'));
    }

    // An invalid freeze-out result is refused too.
    let negative = DopantDensities {
        compensating_density_m3: -1.0,
        ..freeze_out_result(3e15, 2e14)
    };
    let error = fit_mobility_scattering(&good_points(), &settings, Some(&negative)).unwrap_err();
    assert!(matches!(
        error,
        ScatteringError::InvalidSetting {
            setting: "compensating_density_m3",
            ..
        }
    ));
}

#[test]
fn lattice_only_data_warn_that_the_ionized_density_is_undetermined() {
    // Lightly doped silicon above 200 K: ionized-impurity scattering is a fraction of a
    // percent of the rate, and N_I is whatever the bounds allow.
    let settings = ScatteringSettings {
        screening: ScreeningDensity::ImpurityDensity,
        ..ScatteringSettings::new(silicon_electrons())
    };
    let points = synthetic(
        &settings,
        &parameters(0.1448, 2.33, 1e19),
        &temperatures(200.0, 400.0, 10.0),
        no_carriers,
        0.01,
        true,
        5,
    );
    let fit = fit_mobility_scattering(&points, &settings, None).unwrap();
    assert!(
        fit.warnings.iter().any(|warning| warning.contains("poorly determined")),
        "{:?}",
        fit.warnings
    );
    // Its uncertainty says so as well: of the order of the value itself.
    let ionized = fit.ionized_impurity_density_m3;
    assert!(
        ionized.uncertainty.is_none_or(|unc| unc > 0.5 * ionized.value),
        "{ionized:?}"
    );
}
