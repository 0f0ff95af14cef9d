//! Tests of the `arrhenius` module: published check values, recovery from forward-generated data, and bad input.

use super::*;
use crate::freeze_out::realistic::{realizations, RealisticSeries, CM3};
use crate::materials::Material;
use mobilis_numerics::fit::Coverage;
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::statistics::{solve_charge_neutrality, Dopants};

/// Electron density of n-type silicon (Levinshtein bands) from core's full neutrality
/// solver.
fn silicon_electrons(dopants: &Dopants, temperature_k: f64) -> f64 {
    solve_charge_neutrality(dopants, &Material::silicon().band_model(), temperature_k)
        .unwrap()
        .electron_density_m3
}

fn point(temperature_k: f64, density_m3: f64, carrier_type: CarrierType) -> DensityPoint {
    DensityPoint {
        temperature_k,
        density_m3,
        density_unc_m3: None,
        carrier_type: Some(carrier_type),
        ..DensityPoint::default()
    }
}

fn geometric(low: f64, high: f64, count: usize) -> Vec<f64> {
    (0..count)
        .map(|k| low * (high / low).powf(k as f64 / (count - 1) as f64))
        .collect()
}

// Compensated regime, noiseless. From n (n + N_A) / (N_D - N_A - n) = K (Blakemore 1962;
// Look 1989), d ln n / d(1/kT) = (d ln K / d(1/kT)) / (1 + eps), eps = n / (N_D - N_A - n)
// + n / (N_A + n), and ln(K T^-1.5) has slope exactly -E_D. So the local slope of
// ln(n T^-1.5) is -E_D / (1 + eps), and the least-squares slope, a positively weighted
// average of local slopes, lies between -E_D and -E_D / (1 + eps_max): that interval is
// the tolerance, computed from the data's own eps.
#[test]
fn compensated_slope_returns_the_donor_energy() {
    let (donors, acceptors, energy) = (1e16 * CM3, 1e15 * CM3, 0.045);
    let dopants = Dopants::new(donors, acceptors, energy, 0.045);
    let temperatures = geometric(14.0, 22.0, 10);
    let points: Vec<DensityPoint> = temperatures
        .iter()
        .map(|t| point(*t, silicon_electrons(&dopants, *t), CarrierType::N))
        .collect();
    let eps_max = points
        .iter()
        .map(|p| {
            let n = p.density_m3;
            n / (donors - acceptors - n) + n / (acceptors + n)
        })
        .fold(0.0, f64::max);
    assert!(
        eps_max < 2e-3,
        "the range must be deep in the compensated regime: {eps_max}"
    );
    let settings = ArrheniusSettings {
        range: ArrheniusRange::Temperatures {
            min_k: 10.0,
            max_k: 25.0,
        },
        ..ArrheniusSettings::default()
    };
    let fit = fit_arrhenius(&points, &settings).unwrap();
    let e = fit.activation_energy_ev;
    assert!(
        e <= energy * (1.0 + 1e-9) && e >= energy / (1.0 + eps_max) * (1.0 - 1e-9),
        "{e} eps_max {eps_max}"
    );
    assert!(fit.activation_energy_ev_unc < 1e-4);
    assert_eq!(fit.points_used, 10);
    assert_eq!(
        (fit.temperature_min_k, fit.temperature_max_k),
        (temperatures[0], temperatures[9])
    );
    assert!(!fit.automatic_range);
    assert_eq!(fit.regime, ArrheniusRegime::Compensated);
    assert!(fit.line.r_squared > 1.0 - 1e-6);
}

// Uncompensated regime (N_A = 0), noiseless: from n^2 / (N_D - n) = K, with eps = n / (N_D - n)
// the local slope of ln(n T^-3/4) against 1/kT is -(E_D - 0.75 kT eps) / (2 + eps) (the same
// derivation, using d ln T / d(1/kT) = -kT), so twice its negative, the reported energy,
// lies between the smallest 2 (E_D - 0.75 kT eps) / (2 + eps) of the data and E_D.
#[test]
fn uncompensated_slope_with_t_three_quarters_returns_the_donor_energy() {
    let (donors, energy) = (1e17 * CM3, 0.045);
    let dopants = Dopants::new(donors, 0.0, energy, 0.045);
    let temperatures = geometric(15.0, 25.0, 12);
    let points: Vec<DensityPoint> = temperatures
        .iter()
        .map(|t| point(*t, silicon_electrons(&dopants, *t), CarrierType::N))
        .collect();
    let kelvin_ev = mobilis_physics::constants::BOLTZMANN_EV_PER_K;
    let lowest_local = points
        .iter()
        .map(|p| {
            let eps = p.density_m3 / (donors - p.density_m3);
            2.0 * (energy - 0.75 * kelvin_ev * p.temperature_k * eps) / (2.0 + eps)
        })
        .fold(f64::INFINITY, f64::min);
    assert!(lowest_local > 0.99 * energy, "the range must be well inside the regime");
    let settings = ArrheniusSettings {
        regime: ArrheniusRegime::Uncompensated,
        range: ArrheniusRange::Temperatures {
            min_k: 10.0,
            max_k: 30.0,
        },
        ..ArrheniusSettings::default()
    };
    let fit = fit_arrhenius(&points, &settings).unwrap();
    let e = fit.activation_energy_ev;
    assert!(
        e <= energy * (1.0 + 1e-9) && e >= lowest_local * (1.0 - 1e-9),
        "{e} vs [{lowest_local}, {energy}]"
    );
    // The reported energy is twice the slope, and so is its uncertainty.
    assert!((e + 2.0 * fit.line.slope).abs() < 1e-15);
    assert!((fit.activation_energy_ev_unc - 2.0 * fit.line.slope_unc).abs() < 1e-18);
    // Read with the compensated exponent, the same data give ln(n T^-1.5) = const
    // - 0.75 ln T - E_D / 2kT, whose slope is -E_D/2 + 0.75 kT: the wrong regime halves the
    // energy (less 0.75 k T at mid-range).
    let wrong = fit_arrhenius(
        &points,
        &ArrheniusSettings {
            regime: ArrheniusRegime::Compensated,
            ..settings
        },
    )
    .unwrap();
    let mid = 0.75 * kelvin_ev * 20.0;
    assert!((wrong.activation_energy_ev - (energy / 2.0 - mid)).abs() < 0.05 * mid + 0.01 * energy);
}

#[test]
fn p_type_acceptors_mirror_the_donors() {
    // Boron-like acceptors compensated by donors: holes follow the mirror equation.
    let (acceptors, donors, energy) = (1e16 * CM3, 2e15 * CM3, 0.045);
    let dopants = Dopants::new(donors, acceptors, 0.045, energy);
    let bands = Material::silicon().band_model();
    let points: Vec<DensityPoint> = geometric(14.0, 20.0, 8)
        .into_iter()
        .map(|t| {
            point(
                t,
                solve_charge_neutrality(&dopants, &bands, t).unwrap().hole_density_m3,
                CarrierType::P,
            )
        })
        .collect();
    let eps_max = points
        .iter()
        .map(|p| p.density_m3 / (acceptors - donors - p.density_m3) + p.density_m3 / (donors + p.density_m3))
        .fold(0.0, f64::max);
    let settings = ArrheniusSettings {
        range: ArrheniusRange::Temperatures {
            min_k: 1.0,
            max_k: 100.0,
        },
        ..ArrheniusSettings::default()
    };
    let fit = fit_arrhenius(&points, &settings).unwrap();
    assert_eq!(fit.carrier_type, CarrierType::P);
    let e = fit.activation_energy_ev;
    assert!(
        e <= energy * (1.0 + 1e-9) && e >= energy / (1.0 + eps_max) * (1.0 - 1e-9),
        "{e}"
    );
}

#[test]
fn automatic_range_finds_the_freeze_out_and_the_slope_within_its_bound() {
    // A whole series, 12 K to 300 K, compensated: the rule must pick low temperatures where
    // the local slope is steady, and the energy must lie in the interval that the
    // curvature of the chosen window allows (see the compensated test).
    let (donors, acceptors, energy) = (1e16 * CM3, 1e15 * CM3, 0.045);
    let dopants = Dopants::new(donors, acceptors, energy, 0.045);
    let points: Vec<DensityPoint> = geometric(12.0, 300.0, 40)
        .into_iter()
        .map(|t| point(t, silicon_electrons(&dopants, t), CarrierType::N))
        .collect();
    let fit = fit_arrhenius(&points, &ArrheniusSettings::default()).unwrap();
    assert!(fit.automatic_range);
    assert_eq!(fit.temperature_min_k, 12.0);
    let used: Vec<&ArrheniusPoint> = fit.points.iter().filter(|p| p.used).collect();
    assert_eq!(used.len(), fit.points_used);
    assert!(used.len() >= 4);
    let eps_max = used
        .iter()
        .map(|p| {
            let n = p.density_m3;
            n / (donors - acceptors - n) + n / (acceptors + n)
        })
        .fold(0.0, f64::max);
    // A steady window (local slopes within 25 %) cannot reach far into the bend.
    assert!(eps_max < 0.25, "{eps_max}");
    let e = fit.activation_energy_ev;
    assert!(
        e <= energy * (1.0 + 1e-9) && e >= energy / (1.0 + eps_max),
        "{e} eps_max {eps_max}"
    );
    // Everything used is well below the plateau.
    assert!(used.iter().all(|p| p.density_m3 <= 0.1 * (donors - acceptors)));

    // With 3 % noise (no uncertainties given) the rule still finds a window, and the
    // energy lies in the curvature interval of that window widened by three standard errors.
    let mut rng = Rng::seeded(5);
    let noisy: Vec<DensityPoint> = points
        .iter()
        .map(|p| DensityPoint {
            density_m3: p.density_m3 * (0.03 * rng.standard_normal()).exp(),
            ..*p
        })
        .collect();
    let fit = fit_arrhenius(&noisy, &ArrheniusSettings::default()).unwrap();
    let eps_max = fit
        .points
        .iter()
        .filter(|p| p.used)
        .map(|p| {
            // The noiseless density at this temperature sets the curvature.
            let n = silicon_electrons(&dopants, p.temperature_k);
            n / (donors - acceptors - n) + n / (acceptors + n)
        })
        .fold(0.0, f64::max);
    let (e, sigma) = (fit.activation_energy_ev, fit.activation_energy_ev_unc);
    assert!(fit.points_used >= 4);
    assert!(
        e <= energy + 3.0 * sigma && e >= energy / (1.0 + eps_max) - 3.0 * sigma,
        "{e} +- {sigma}, eps_max {eps_max}"
    );
}

#[test]
fn noisy_weighted_data_give_the_energy_within_its_uncertainty() {
    // 2 % noise with its uncertainty given: deep in the compensated regime the systematic
    // curvature (eps < 1e-3, so below 5e-5 eV) is far below the statistical error, and the
    // energy must agree with E_D within three standard errors.
    let (donors, acceptors, energy) = (5e15 * CM3, 1e15 * CM3, 0.054);
    let dopants = Dopants::new(donors, acceptors, energy, 0.045);
    let mut rng = Rng::seeded(77);
    let points: Vec<DensityPoint> = geometric(14.0, 24.0, 15)
        .into_iter()
        .map(|t| {
            let n = silicon_electrons(&dopants, t) * (0.02 * rng.standard_normal()).exp();
            DensityPoint {
                temperature_k: t,
                density_m3: n,
                density_unc_m3: Some(0.02 * n),
                carrier_type: Some(CarrierType::N),
                ..DensityPoint::default()
            }
        })
        .collect();
    let settings = ArrheniusSettings {
        range: ArrheniusRange::Temperatures {
            min_k: 10.0,
            max_k: 30.0,
        },
        ..ArrheniusSettings::default()
    };
    let fit = fit_arrhenius(&points, &settings).unwrap();
    assert!(fit.line.weighted);
    let pull = (fit.activation_energy_ev - energy) / fit.activation_energy_ev_unc;
    assert!(
        pull.abs() < 3.0,
        "{} +- {}",
        fit.activation_energy_ev,
        fit.activation_energy_ev_unc
    );
    assert!(fit.points.iter().all(|p| p.reduced_ln_density_unc == Some(0.02)));
    // A Hall factor scales every density alike: the slope does not move, the intercept
    // moves by ln r_H.
    let corrected = fit_arrhenius(
        &points,
        &ArrheniusSettings {
            hall_factor: HallFactor::Constant(1.18),
            ..settings
        },
    )
    .unwrap();
    assert!((corrected.activation_energy_ev - fit.activation_energy_ev).abs() < 1e-12);
    assert!((corrected.line.intercept - fit.line.intercept - 1.18f64.ln()).abs() < 1e-9);
}

#[test]
fn refuses_bad_input_and_impossible_ranges() {
    let plateau: Vec<DensityPoint> = geometric(200.0, 400.0, 8)
        .into_iter()
        .map(|t| point(t, 1e21 * (1.0 + 0.001 * t / 400.0), CarrierType::N))
        .collect();
    assert!(matches!(
        fit_arrhenius(&plateau, &ArrheniusSettings::default()),
        Err(ArrheniusError::NoFreezeOutRange { candidates: 0, .. })
    ));
    let narrow = ArrheniusSettings {
        range: ArrheniusRange::Temperatures {
            min_k: 200.0,
            max_k: 220.0,
        },
        ..ArrheniusSettings::default()
    };
    assert!(matches!(
        fit_arrhenius(&plateau, &narrow),
        Err(ArrheniusError::TooFewPointsInRange { required: 3, .. })
    ));
    let outside = ArrheniusSettings {
        range: ArrheniusRange::Temperatures {
            min_k: 10.0,
            max_k: 20.0,
        },
        ..ArrheniusSettings::default()
    };
    assert!(matches!(
        fit_arrhenius(&plateau, &outside),
        Err(ArrheniusError::Series(SeriesError::RangeExcludesAllData { .. }))
    ));
    let mut switching = plateau.clone();
    switching[6].carrier_type = Some(CarrierType::P);
    assert!(matches!(
        fit_arrhenius(&switching, &narrow),
        Err(ArrheniusError::TooFewPointsInRange { .. })
    ));
    assert!(matches!(
        fit_arrhenius(&switching, &ArrheniusSettings::default()),
        Err(ArrheniusError::Series(SeriesError::CarrierTypeSwitch { index: 6, .. }))
    ));
    let mut negative = plateau.clone();
    negative[2].density_m3 = -1e21;
    assert!(matches!(
        fit_arrhenius(&negative, &ArrheniusSettings::default()),
        Err(ArrheniusError::Series(SeriesError::NonPositiveDensity { index: 2, .. }))
    ));
    for rule in [
        AutomaticRange {
            plateau_fraction: 1.5,
            ..AutomaticRange::default()
        },
        AutomaticRange {
            slope_spread: 0.0,
            ..AutomaticRange::default()
        },
        AutomaticRange {
            min_points: 2,
            ..AutomaticRange::default()
        },
    ] {
        let settings = ArrheniusSettings {
            range: ArrheniusRange::Automatic(rule),
            ..ArrheniusSettings::default()
        };
        assert!(matches!(
            fit_arrhenius(&plateau, &settings),
            Err(ArrheniusError::InvalidSetting { .. })
        ));
    }
    let message = ArrheniusError::NoFreezeOutRange {
        candidates: 2,
        min_points: 4,
    }
    .to_string();
    assert!(message.contains("give temperature_min_K and temperature_max_K") && !message.ends_with('.'));
    // A range where the density falls with temperature is fitted but flagged.
    let falling: Vec<DensityPoint> = geometric(20.0, 40.0, 5)
        .into_iter()
        .map(|t| point(t, 1e20 * (-t / 10.0).exp(), CarrierType::N))
        .collect();
    let fit = fit_arrhenius(
        &falling,
        &ArrheniusSettings {
            range: ArrheniusRange::Temperatures {
                min_k: 1.0,
                max_k: 100.0,
            },
            ..ArrheniusSettings::default()
        },
    )
    .unwrap();
    assert!(fit.activation_energy_ev < 0.0);
    assert!(fit.warnings.iter().any(|w| w.contains("not a freeze-out range")));
}

/// The compensated silicon of the freeze-out coverage test measured densely in deep
/// freeze-out, 16 temperatures from 20 K to 30 K, where n stays below 3e-4 N_A: the
/// Arrhenius slope is -E_D / (1 + eps) with eps < 3e-4 (the compensated test above), a
/// bias below 0.015 meV, a tenth of the statistical uncertainty.
fn deep_freeze_out_series() -> RealisticSeries {
    RealisticSeries {
        temperatures_k: geometric(20.0, 30.0, 16),
        ..RealisticSeries::compensated_silicon()
    }
}

#[test]
fn arrhenius_error_bars_cover_the_truth_on_a_realistic_series() {
    // Reading noise of 1-1.5 % estimated from eight readings, 30 mK of stage drift and a 3 %
    // thickness calibration (which moves every ordinate alike and so not the slope); the
    // truth is E_D. Honest: 55-80 % within 1 sigma and at least 90 % within 2 sigma.
    let series = deep_freeze_out_series();
    let eps_max = series
        .temperatures_k
        .iter()
        .map(|t| series.true_density(*t + 0.2) / series.acceptors_m3)
        .fold(0.0, f64::max);
    assert!(eps_max < 3e-4, "{eps_max}");
    let settings = ArrheniusSettings {
        range: ArrheniusRange::Temperatures {
            min_k: 0.0,
            max_k: f64::INFINITY,
        },
        ..ArrheniusSettings::default()
    };
    let count = realizations(400, 2000);
    let mut rng = Rng::seeded(1982);
    let mut coverage = Coverage::default();
    let mut without_temperatures = Coverage::default();
    for _ in 0..count {
        let drawn = series.draw(&mut rng);
        let fit = fit_arrhenius(&drawn.points, &settings).unwrap();
        coverage.record(
            fit.activation_energy_ev,
            fit.activation_energy_ev_unc,
            series.donor_energy_ev,
        );
        assert!(fit.effective_variance_passes >= 1);
        // The same data with the drift left out of the weights: the bars are too short.
        let mut blind = drawn.points.clone();
        blind.iter_mut().for_each(|point| point.temperature_unc_k = None);
        let blind_fit = fit_arrhenius(&blind, &settings).unwrap();
        without_temperatures.record(
            blind_fit.activation_energy_ev,
            blind_fit.activation_energy_ev_unc,
            series.donor_energy_ev,
        );
    }
    eprintln!("Arrhenius E: {}", coverage.describe());
    eprintln!(
        "Arrhenius E without temperature errors: {}",
        without_temperatures.describe()
    );
    assert!(coverage.is_honest(), "{}", coverage.describe());
    assert!(without_temperatures.two_sigma_fraction() < coverage.two_sigma_fraction());
}

#[test]
fn a_point_stated_absurdly_precisely_is_floored_and_the_temperature_enters_through_the_slope() {
    let series = deep_freeze_out_series();
    let mut drawn = series.draw(&mut Rng::seeded(7)).points;
    drawn[0].density_unc_m3 = Some(5e-13 * drawn[0].density_m3);
    let settings = ArrheniusSettings {
        range: ArrheniusRange::Temperatures {
            min_k: 0.0,
            max_k: f64::INFINITY,
        },
        ..ArrheniusSettings::default()
    };
    let fit = fit_arrhenius(&drawn, &settings).unwrap();
    assert!(fit.floored_points >= 1);
    // The point's weight: the floor (1e-3) with the drift through the line's slope,
    // (b / kT^2 - 1.5 / T) u_T with b = -E: (E + 1.5 kT) / kT^2 x 30 mK, about 3.7 % at
    // 20 K (the derivative of ln(n T^-3/2) = const - E / kT).
    let kt = mobilis_physics::constants::BOLTZMANN_EV_PER_K * 20.0;
    let expected = (1e-6 + ((-fit.line.slope + 1.5 * kt) / (kt * 20.0) * 0.030f64).powi(2)).sqrt();
    let coldest = fit.points[0].reduced_ln_density_unc.unwrap();
    assert!((coldest / expected - 1.0).abs() < 1e-9, "{coldest} vs {expected}");
    assert!(
        (fit.activation_energy_ev - series.donor_energy_ev).abs() < 4.0 * fit.activation_energy_ev_unc,
        "{} +- {}",
        fit.activation_energy_ev,
        fit.activation_energy_ev_unc
    );
    assert_eq!(fit.temperature_unc_source, crate::freeze_out::UncertaintySource::Points);
    assert!(fit.chi_square_p_value.is_finite() && fit.birge_ratio >= 1.0);
}

#[test]
fn understated_errors_widen_the_slope_by_the_birge_ratio_and_name_the_worst_points() {
    // 2 % noise stated as 0.4 %: the standard error of the slope grows by sqrt(chi^2 / nu)
    // to about that of the honest statement (within the spread of the Birge ratio,
    // sqrt(1 / 2 nu) = 0.18 for 14 degrees of freedom, doubled).
    let (donors, acceptors, energy) = (5e15 * CM3, 1e15 * CM3, 0.054);
    let dopants = Dopants::new(donors, acceptors, energy, 0.045);
    let mut rng = Rng::seeded(78);
    let honest: Vec<DensityPoint> = geometric(14.0, 24.0, 16)
        .into_iter()
        .map(|t| {
            let n = silicon_electrons(&dopants, t) * (1.0 + 0.02 * rng.standard_normal());
            DensityPoint {
                temperature_k: t,
                density_m3: n,
                density_unc_m3: Some(0.02 * n),
                carrier_type: Some(CarrierType::N),
                ..DensityPoint::default()
            }
        })
        .collect();
    let understated: Vec<DensityPoint> = honest
        .iter()
        .map(|point| DensityPoint {
            density_unc_m3: Some(0.004 * point.density_m3),
            ..*point
        })
        .collect();
    let settings = ArrheniusSettings {
        range: ArrheniusRange::Temperatures {
            min_k: 10.0,
            max_k: 30.0,
        },
        ..ArrheniusSettings::default()
    };
    let fit = fit_arrhenius(&understated, &settings).unwrap();
    let reference = fit_arrhenius(&honest, &settings).unwrap();
    assert!(fit.birge_ratio > 3.0, "{}", fit.birge_ratio);
    assert!((fit.birge_ratio - fit.line.reduced_chi_square.sqrt()).abs() < 1e-12);
    assert!(fit.chi_square_p_value < 1e-3);
    let ratio = fit.activation_energy_ev_unc / reference.activation_energy_ev_unc;
    assert!((ratio - 1.0).abs() < 0.36, "{ratio}");
    // The same slope: the weights are proportional.
    assert!((fit.activation_energy_ev - reference.activation_energy_ev).abs() < 1e-12);
    let warning = fit
        .warnings
        .iter()
        .find(|w| w.contains("Birge ratio"))
        .expect("a poor-fit warning");
    assert!(
        warning.contains("worst points") && warning.contains("relative_uncertainty_floor"),
        "{warning}"
    );
    // Without uncertainties the line is unweighted and reports no p-value.
    let bare: Vec<DensityPoint> = honest
        .iter()
        .map(|point| DensityPoint {
            density_unc_m3: None,
            temperature_unc_k: Some(0.03),
            ..*point
        })
        .collect();
    let unweighted = fit_arrhenius(&bare, &settings).unwrap();
    assert!(unweighted.chi_square_p_value.is_nan() && unweighted.birge_ratio.is_nan());
    assert!(unweighted
        .warnings
        .iter()
        .any(|w| w.contains("temperature uncertainties were not used")));
}

#[test]
fn a_hall_factor_table_straightens_the_arrhenius_line() {
    // r_H falling from 1.93 to 1.18 across the window (linear in T, an invented test input)
    // tilts ln(n_H T^-3/2) and so the slope; the table restores E_D to its noiseless bound.
    let (donors, acceptors, energy) = (1e16 * CM3, 1e15 * CM3, 0.045);
    let dopants = Dopants::new(donors, acceptors, energy, 0.045);
    let hall_factor = |t: f64| 1.93 - 0.75 * (t - 14.0) / 8.0;
    let points: Vec<DensityPoint> = geometric(14.0, 22.0, 10)
        .into_iter()
        .map(|t| point(t, silicon_electrons(&dopants, t) / hall_factor(t), CarrierType::N))
        .collect();
    let range = ArrheniusRange::Temperatures {
        min_k: 10.0,
        max_k: 25.0,
    };
    let tilted = fit_arrhenius(
        &points,
        &ArrheniusSettings {
            range,
            ..ArrheniusSettings::default()
        },
    )
    .unwrap();
    assert!(
        (tilted.activation_energy_ev / energy - 1.0).abs() > 0.03,
        "{}",
        tilted.activation_energy_ev
    );
    let table = vec![(14.0, 1.93), (22.0, 1.18)];
    let fit = fit_arrhenius(
        &points,
        &ArrheniusSettings {
            range,
            hall_factor: HallFactor::Table(table),
            ..ArrheniusSettings::default()
        },
    )
    .unwrap();
    // Deep in the compensated regime (eps < 2e-3, the first test), as there.
    assert!(
        (fit.activation_energy_ev / energy - 1.0).abs() < 2e-3,
        "{}",
        fit.activation_energy_ev
    );
    assert_eq!(fit.hall_factor, None);
    assert!((fit.points[0].hall_factor - 1.93).abs() < 1e-12);
}
