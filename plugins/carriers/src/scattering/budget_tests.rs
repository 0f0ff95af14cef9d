//! Tests of the uncertainty budget of the scattering fit: temperature errors through the
//! model's slope (effective variance), the relative uncertainty floor, the chi-square
//! diagnostics with Birge scaling, calibrations applied once after the fit, the upper limit
//! of an undetermined density, and the coverage of the reported uncertainties over many
//! realizations of realistic data.

use super::*;
use mobilis_numerics::fit::Coverage;
use mobilis_numerics::noise::Rng;

const CM3: f64 = 1e6; // cm^-3 to m^-3

fn silicon_electrons() -> ScatteringMedium {
    medium_for(&Material::silicon(), CarrierType::N)
}

/// Lightly compensated n-Si: a lattice law of 1448 (T/300)^-2.33 cm^2/Vs (invented test
/// input) and Brooks-Herring scattering on 1e16 cm^-3 charged centres screened by N_I.
fn truth() -> ScatteringParameters {
    ScatteringParameters {
        lattice_mobility_300k_m2_per_vs: 0.1448,
        lattice_exponent: 2.33,
        ionized_density_m3: 1e16 * CM3,
        neutral_density_m3: None,
        constant_mobility_m2_per_vs: None,
    }
}

fn settings() -> ScatteringSettings {
    ScatteringSettings {
        screening: ScreeningDensity::ImpurityDensity,
        ..ScatteringSettings::new(silicon_electrons())
    }
}

/// How a synthetic series is measured.
#[derive(Clone, Copy)]
struct Lab {
    /// Relative statistical noise of each mobility (stated as its uncertainty).
    relative_noise: f64,
    /// Standard deviation of the true sample temperature about the reading, K.
    temperature_error_k: f64,
    /// The temperature uncertainty stated with each point, K (None: not stated).
    stated_temperature_unc_k: Option<f64>,
    /// Standard deviation of the mobility scale error drawn once per series (a field
    /// calibration).
    scale_error: f64,
}

/// Readings at 20, 25, ..., 400 K of a sample whose true temperature wanders about each
/// reading, with a scale error common to the series. Returns the points and the scale.
fn measure(lab: Lab, rng: &mut Rng) -> (Vec<MobilityPoint>, f64) {
    let settings = settings();
    let scale = 1.0 + lab.scale_error * rng.standard_normal();
    let points = (0..=76)
        .map(|i| {
            let reading_k = 20.0 + 5.0 * i as f64;
            let true_k = reading_k + lab.temperature_error_k * rng.standard_normal();
            let exact = evaluate_model(&settings, &truth(), true_k, None).unwrap().total;
            let mobility = scale * exact * (1.0 + lab.relative_noise * rng.standard_normal());
            MobilityPoint {
                temperature_k: reading_k,
                mobility_m2_per_vs: mobility,
                mobility_unc_m2_per_vs: Some(lab.relative_noise * mobility),
                temperature_unc_k: lab.stated_temperature_unc_k,
                carrier_density_m3: None,
            }
        })
        .collect();
    (points, scale)
}

// A steep point weighs what it can tell: each point's weight is sqrt(u_mu^2 + (d ln mu /
// dT)^2 u_T^2) in ln mu (effective variance, Clutton-Brock 1967; Orear 1982), with the slope
// of the fitted model, here recomputed from the model by a wider central difference. A
// stage 0.5 K off its reading and a 0.2 % mobility noise: where the ionized-impurity term
// makes the slope steep, the temperature dominates the weight.
#[test]
fn temperature_uncertainty_widens_the_weights_of_steep_points() {
    let lab = Lab {
        relative_noise: 0.002,
        temperature_error_k: 0.5,
        stated_temperature_unc_k: Some(0.5),
        scale_error: 0.0,
    };
    let (points, _) = measure(lab, &mut Rng::seeded(7));
    let fit = fit_mobility_scattering(&points, &settings(), None).unwrap();
    assert!(fit.goodness.temperature_uncertainty_used);
    assert!(fit.goodness.effective_variance_passes >= 1);
    let sigma_at = |temperature_k: f64| {
        let row = fit.rows.iter().find(|row| row.temperature_k == temperature_k).unwrap();
        (row.log_residual.unwrap() / row.normalized_residual.unwrap()).abs()
    };
    let slope = |temperature_k: f64| {
        let ln_mu = |t: f64| {
            evaluate_model(&settings(), &fit.fitted_parameters, t, None)
                .unwrap()
                .total
                .ln()
        };
        (ln_mu(temperature_k + 0.01) - ln_mu(temperature_k - 0.01)) / 0.02
    };
    for temperature_k in [20.0, 60.0, 300.0] {
        let expected = (0.002f64.powi(2) + (slope(temperature_k) * 0.5).powi(2)).sqrt();
        let sigma = sigma_at(temperature_k);
        // The fit's last pass set the weights at the previous pass's parameters.
        assert!(
            (sigma / expected - 1.0).abs() < 1e-3,
            "{temperature_k} K: {sigma} against {expected}"
        );
    }
    // Somewhere in the cold half the slope is steep enough to widen the weight by half.
    let steepest = fit
        .rows
        .iter()
        .filter(|row| row.temperature_k < 150.0)
        .map(|row| sigma_at(row.temperature_k))
        .fold(0.0, f64::max);
    assert!(steepest > 3.0 * 0.002, "{steepest}");
    // At 300 K the slope of about -2.3 / 300 per K adds about 0.4 % in quadrature.
    assert!(sigma_at(300.0) < 2.5 * 0.002, "{}", sigma_at(300.0));
    // With the temperature error stated, the model describes the data within their errors.
    assert!(
        fit.goodness.reduced_chi_square < 1.6 && fit.goodness.p_value > 1e-3,
        "chi^2/nu {} p {}",
        fit.goodness.reduced_chi_square,
        fit.goodness.p_value
    );
    // Without it, the cold points disagree far beyond their 0.3 % and the fit says so: the
    // p-value collapses, the Birge ratio scales the uncertainties, and the warning names the
    // worst points and the parameters that govern the weights.
    let unstated: Vec<MobilityPoint> = points
        .iter()
        .map(|point| MobilityPoint {
            temperature_unc_k: None,
            ..*point
        })
        .collect();
    let blind = fit_mobility_scattering(&unstated, &settings(), None).unwrap();
    assert!(!blind.goodness.temperature_uncertainty_used);
    assert!(
        blind.goodness.reduced_chi_square > 3.0,
        "{}",
        blind.goodness.reduced_chi_square
    );
    assert!(blind.goodness.p_value < 1e-3);
    assert!((blind.goodness.birge_ratio - blind.goodness.reduced_chi_square.sqrt()).abs() < 1e-12);
    assert!((blind.goodness.covariance_scale - blind.goodness.reduced_chi_square).abs() < 1e-12);
    let warning = blind
        .warnings
        .iter()
        .find(|warning| warning.contains("Birge ratio"))
        .expect("a poor-fit warning");
    assert!(warning.contains("worst points: T = "), "{warning}");
    assert!(warning.contains("temperature_K_unc") && warning.contains("relative_uncertainty_floor"));
    // The Birge ratio widens the uncertainties by exactly its factor.
    let unscaled = blind.covariance[(1, 1)] / blind.goodness.covariance_scale;
    assert!((blind.lattice_exponent.uncertainty.unwrap() - unscaled.sqrt() * blind.goodness.birge_ratio).abs() < 1e-12);
}

#[test]
fn no_point_pins_the_fit_below_the_floor() {
    let lab = Lab {
        relative_noise: 0.01,
        temperature_error_k: 0.0,
        stated_temperature_unc_k: None,
        scale_error: 0.0,
    };
    let (mut points, _) = measure(lab, &mut Rng::seeded(11));
    // One point claims 1e-9 relative and sits 5 % off the others.
    points[3].mobility_m2_per_vs *= 1.05;
    points[3].mobility_unc_m2_per_vs = Some(1e-9 * points[3].mobility_m2_per_vs);
    let fit = fit_mobility_scattering(&points, &settings(), None).unwrap();
    assert_eq!(fit.goodness.floored_points, 1);
    assert!(fit
        .warnings
        .iter()
        .any(|warning| warning.contains("relative_uncertainty_floor")));
    let row = &fit.rows[3];
    let sigma = (row.log_residual.unwrap() / row.normalized_residual.unwrap()).abs();
    assert!((sigma - RELATIVE_UNCERTAINTY_FLOOR).abs() < 1e-12, "{sigma}");
    // The floored point cannot drag the lattice law: mu_300 stays within 3 % of the truth
    // (the point is at 35 K, where the lattice term is a small part of the scattering).
    let mu_300 = fit.lattice_mobility_300k_m2_per_vs.value;
    assert!((mu_300 / 0.1448 - 1.0).abs() < 0.03, "{mu_300}");
    // A floor of 0 gives the point its 1e-9 back: then it pins the fit.
    let pinned = fit_mobility_scattering(
        &points,
        &ScatteringSettings {
            relative_uncertainty_floor: 0.0,
            ..settings()
        },
        None,
    )
    .unwrap();
    assert_eq!(pinned.goodness.floored_points, 0);
    assert!(pinned.goodness.reduced_chi_square > 100.0 * fit.goodness.reduced_chi_square);
    let bad = fit_mobility_scattering(
        &points,
        &ScatteringSettings {
            relative_uncertainty_floor: 1.5,
            ..settings()
        },
        None,
    )
    .unwrap_err();
    assert!(bad.to_string().contains("relative_uncertainty_floor"), "{bad}");
}

// A scale error common to every point moves mu_300 by the same fraction and N_I by about
// the opposite (1/mu_I is proportional to N_I up to the slowly varying logarithm), and the
// exponent not at all: the fit's linear response to the calibration says exactly that.
#[test]
fn a_mobility_calibration_is_applied_once_after_the_fit() {
    let lab = Lab {
        relative_noise: 0.005,
        temperature_error_k: 0.0,
        stated_temperature_unc_k: None,
        scale_error: 0.0,
    };
    let (points, _) = measure(lab, &mut Rng::seeded(3));
    let without = fit_mobility_scattering(&points, &settings(), None).unwrap();
    let stated = ScatteringSettings {
        mobility_scale_relative_unc: Some(0.02),
        ..settings()
    };
    let with = fit_mobility_scattering(&points, &stated, None).unwrap();
    // The statistical part and the fitted values do not change.
    assert_eq!(without.parameter_values, with.parameter_values);
    let split = |fit: &ScatteringFit, name: &str| fit.budget.iter().find(|(n, _)| *n == name).unwrap().1;
    let mu_split = split(&with, "lattice_mobility_300K_m2_per_Vs");
    let mu_300 = with.lattice_mobility_300k_m2_per_vs.value;
    assert_eq!(
        mu_split.statistical,
        split(&without, "lattice_mobility_300K_m2_per_Vs").statistical
    );
    assert!(
        (mu_split.systematic.unwrap() / mu_300 - 0.02).abs() < 2e-4,
        "{mu_split:?}"
    );
    let total = with.lattice_mobility_300k_m2_per_vs.uncertainty.unwrap();
    assert!((total - mu_split.statistical.unwrap().hypot(mu_split.systematic.unwrap())).abs() < 1e-15);
    // Every systematic part is what refitting the data scaled by 1.02 moves the estimate by
    // (the linear response against the refit, within 5 % of the shift).
    let scaled: Vec<MobilityPoint> = points
        .iter()
        .map(|point| MobilityPoint {
            mobility_m2_per_vs: 1.02 * point.mobility_m2_per_vs,
            mobility_unc_m2_per_vs: point.mobility_unc_m2_per_vs.map(|unc| 1.02 * unc),
            ..*point
        })
        .collect();
    let refit = fit_mobility_scattering(&scaled, &settings(), None).unwrap();
    let ionized_split = split(&with, "ionized_impurity_density_m3");
    let shifts = [
        (
            "ionized_impurity_density_m3",
            (refit.ionized_impurity_density_m3.value / with.ionized_impurity_density_m3.value).ln()
                * with.ionized_impurity_density_m3.value,
        ),
        (
            "lattice_mobility_300K_m2_per_Vs",
            (refit.lattice_mobility_300k_m2_per_vs.value / mu_300).ln() * mu_300,
        ),
        (
            "lattice_exponent",
            refit.lattice_exponent.value - with.lattice_exponent.value,
        ),
    ];
    for (name, shift) in shifts {
        let systematic = split(&with, name).systematic.unwrap();
        assert!(
            (systematic - shift.abs()).abs() <= 0.05 * shift.abs() + 1e-6 * systematic,
            "{name}: {systematic:e} against a refit shift of {shift:e}"
        );
    }
    assert!(with.calibrations_not_stated.is_empty());
    assert_eq!(
        without.calibrations_not_stated,
        vec!["mobility scale (field calibration)"]
    );
    assert!(split(&without, "lattice_exponent").systematic.is_none());
    // A scale calibration of the carrier densities matters only where the model reads them.
    let density_stated = ScatteringSettings {
        density_scale_relative_unc: Some(0.03),
        ..stated
    };
    let unread = fit_mobility_scattering(&points, &density_stated, None).unwrap();
    assert_eq!(split(&unread, "ionized_impurity_density_m3"), ionized_split);
    let negative = ScatteringSettings {
        mobility_scale_relative_unc: Some(-0.01),
        ..settings()
    };
    let error = fit_mobility_scattering(&points, &negative, None).unwrap_err();
    assert!(error.to_string().contains("mobility_scale_relative_unc"), "{error}");
}

#[test]
fn a_bad_temperature_uncertainty_is_refused_by_name() {
    let lab = Lab {
        relative_noise: 0.01,
        temperature_error_k: 0.0,
        stated_temperature_unc_k: Some(0.1),
        scale_error: 0.0,
    };
    let (mut points, _) = measure(lab, &mut Rng::seeded(5));
    points[2].temperature_unc_k = Some(f64::NAN);
    let error = fit_mobility_scattering(&points, &settings(), None).unwrap_err();
    let message = error.to_string();
    assert!(
        message.contains("point 2") && message.contains("temperature_K_unc"),
        "{message}"
    );
    assert!(!message.ends_with('.'));
}

// Coverage (JCGM 100:2008 and the Particle Data Group's practice of scaling by the Birge
// ratio, Birge 1932): over many series measured like a lab's (0.5 % mobility noise, the
// sample 0.1 K off each reading with that stated, a 1 % field calibration drawn once per
// series and stated), the truth lies within 1 sigma in 55-80 % and within 2 sigma in at
// least 90 % of the series. 100 series take about 10 s in a debug build.
#[test]
fn reported_uncertainties_cover_the_truth() {
    let lab = Lab {
        relative_noise: 0.005,
        temperature_error_k: 0.1,
        stated_temperature_unc_k: Some(0.1),
        scale_error: 0.01,
    };
    let stated = ScatteringSettings {
        mobility_scale_relative_unc: Some(0.01),
        ..settings()
    };
    let truth = truth();
    let mut rng = Rng::seeded(20261202);
    let (mut lattice, mut exponent, mut ionized) = (Coverage::default(), Coverage::default(), Coverage::default());
    for _ in 0..100 {
        let (points, _) = measure(lab, &mut rng);
        let fit = fit_mobility_scattering(&points, &stated, None).unwrap();
        let record = |coverage: &mut Coverage, estimate: Estimate, truth: f64| {
            coverage.record(estimate.value, estimate.uncertainty.unwrap_or(f64::NAN), truth)
        };
        record(
            &mut lattice,
            fit.lattice_mobility_300k_m2_per_vs,
            truth.lattice_mobility_300k_m2_per_vs,
        );
        record(&mut exponent, fit.lattice_exponent, truth.lattice_exponent);
        record(&mut ionized, fit.ionized_impurity_density_m3, truth.ionized_density_m3);
    }
    for (name, coverage) in [("mu_300", &lattice), ("alpha", &exponent), ("N_I", &ionized)] {
        println!("coverage {name}: {}", coverage.describe());
        assert!(coverage.is_honest(), "{name}: {}", coverage.describe());
    }
}

// An ionized-impurity density the mobilities cannot see (scattering on 1e13 cm^-3, screened
// by as many electrons, is a negligible part of 1/mu from 250 to 500 K) ends on its lower
// bound without an uncertainty. The fit then reports how large it could be (a profile upper
// limit) and the comparison with a freeze-out count asks only whether the count exceeds
// that.
#[test]
fn an_undetermined_density_is_compared_as_an_upper_limit() {
    let settings = ScatteringSettings::new(silicon_electrons());
    let electrons = Some(1e13 * CM3);
    let faint = ScatteringParameters {
        ionized_density_m3: 1e13 * CM3,
        ..truth()
    };
    let mut rng = Rng::seeded(41);
    let points: Vec<MobilityPoint> = (0..=25)
        .map(|i| {
            let temperature_k = 250.0 + 10.0 * i as f64;
            let mobility = evaluate_model(&settings, &faint, temperature_k, electrons)
                .unwrap()
                .total
                * (1.0 + 0.01 * rng.standard_normal());
            MobilityPoint {
                temperature_k,
                mobility_m2_per_vs: mobility,
                mobility_unc_m2_per_vs: Some(0.01 * mobility),
                temperature_unc_k: None,
                carrier_density_m3: electrons,
            }
        })
        .collect();
    // The freeze-out densities: 1e13 cm^-3 net donors and `compensating_cm3` acceptors.
    let densities = |compensating_cm3: f64| DopantDensities {
        dopant_density_m3: (1e13 + compensating_cm3) * CM3,
        dopant_density_unc_m3: Some(0.05 * (1e13 + compensating_cm3) * CM3),
        compensating_density_m3: compensating_cm3 * CM3,
        compensating_density_unc_m3: Some(0.05 * compensating_cm3 * CM3),
        covariance_m6: None,
    };
    let fit = fit_mobility_scattering(&points, &settings, Some(&densities(0.0))).unwrap();
    let limit = fit.ionized_parameter_upper_limit_m3.expect("an upper limit");
    assert!(fit.ionized_impurity_density_m3.uncertainty.is_none());
    // The limit lies above the truth and well below a density the data would show.
    assert!(limit > 1e13 * CM3 && limit < 1e17 * CM3, "{limit:e}");
    let comparison = fit.comparison.unwrap();
    assert!(
        comparison.consistent && comparison.upper_limit_m3 == Some(limit),
        "{comparison:?}"
    );
    assert!(fit
        .warnings
        .iter()
        .any(|warning| warning.contains("exclude values above")));
    // A freeze-out count far above what the mobilities allow (2e17 cm^-3 charged acceptors
    // and as many donors) is still caught.
    let excluded = fit_mobility_scattering(&points, &settings, Some(&densities(1e17))).unwrap();
    let comparison = excluded.comparison.unwrap();
    assert!(!comparison.consistent, "{comparison:?}");
    assert!(comparison.deviation_sigma > 2.0);
}

// Without carrier densities the screening is N_I itself, and on data that hardly show the
// impurities (1e13 cm^-3 from 250 to 500 K) the fit can find a second minimum at an absurd
// N_I where b << 1 and the Brooks-Herring term falls with temperature like a lattice term.
// The fit names the formula's limit instead of reporting that density silently.
#[test]
fn brooks_herring_outside_its_validity_is_named() {
    let settings = settings();
    let faint = ScatteringParameters {
        ionized_density_m3: 1e13 * CM3,
        ..truth()
    };
    let mut rng = Rng::seeded(41);
    let points: Vec<MobilityPoint> = (0..=25)
        .map(|i| {
            let temperature_k = 250.0 + 10.0 * i as f64;
            let mobility = evaluate_model(&settings, &faint, temperature_k, None).unwrap().total
                * (1.0 + 0.01 * rng.standard_normal());
            MobilityPoint {
                temperature_k,
                mobility_m2_per_vs: mobility,
                mobility_unc_m2_per_vs: Some(0.01 * mobility),
                temperature_unc_k: None,
                carrier_density_m3: None,
            }
        })
        .collect();
    let fit = fit_mobility_scattering(&points, &settings, None).unwrap();
    // With this seed the fit lands there (N_I near 7e20 cm^-3), and says so.
    assert!(
        fit.ionized_impurity_density_m3.value > 1e18 * CM3,
        "{:?}",
        fit.ionized_impurity_density_m3
    );
    assert!(
        fit.warnings
            .iter()
            .any(|warning| warning.contains("screening parameter b falls to") && warning.contains("density_m3")),
        "{:?}",
        fit.warnings
    );
    // Screening by the measured carriers keeps the fit on the physical branch.
    let screened: Vec<MobilityPoint> = points
        .iter()
        .map(|point| MobilityPoint {
            carrier_density_m3: Some(1e13 * CM3),
            ..*point
        })
        .collect();
    let physical = fit_mobility_scattering(&screened, &ScatteringSettings::new(silicon_electrons()), None).unwrap();
    assert!(!physical
        .warnings
        .iter()
        .any(|warning| warning.contains("screening parameter b")));
    assert!(physical.ionized_impurity_density_m3.value < 1e16 * CM3);
}

// Coverage through freeze-out (JCGM 100:2008; Birge 1932): the invented compensated wafer of
// the demo scenario (N_D 3e15, N_A 2e14 cm^-3, 45 meV donors; core's forward model of the
// statistics and the transport), measured from 20 to 400 K with a 3 % thickness error and a
// 1 % field calibration drawn once per series and stated, 1 % mobility and 0.5 % density
// noise, and the stage 0.05 K off each reading, stated. The carriers-plus-compensation fit
// with Brooks' screening from the (equally mis-scaled) freeze-out densities covers N_A, mu_300
// and alpha honestly. 100 series take about 10 s in a debug build.
#[test]
fn compensation_through_freeze_out_is_covered_with_calibration_errors() {
    use mobilis_physics::forward::statistics::{BandModel, Dopants};
    use mobilis_physics::forward::transport::{n_type_transport, MobilityModel};
    let dopants = Dopants::new(3e15 * CM3, 2e14 * CM3, 0.045, 0.045);
    let bands = BandModel::silicon();
    let model = MobilityModel::silicon_electrons();
    let mut rng = Rng::seeded(1202);
    let (mut compensating, mut lattice, mut exponent) = (Coverage::default(), Coverage::default(), Coverage::default());
    for _ in 0..100 {
        let thickness_scale = 1.0 + 0.03 * rng.standard_normal();
        let field_scale = 1.0 + 0.01 * rng.standard_normal();
        let points: Vec<MobilityPoint> = (0..=38)
            .map(|i| {
                let reading_k = 20.0 + 10.0 * i as f64;
                let true_k = reading_k + 0.05 * rng.standard_normal();
                let layer = n_type_transport(&dopants, &bands, 500e-6, true_k, &model).unwrap();
                let mobility = field_scale * layer.mobility_m2_per_vs * (1.0 + 0.01 * rng.standard_normal());
                let density =
                    thickness_scale * layer.equilibrium.electron_density_m3 * (1.0 + 0.005 * rng.standard_normal());
                MobilityPoint {
                    temperature_k: reading_k,
                    mobility_m2_per_vs: mobility,
                    mobility_unc_m2_per_vs: Some(0.01 * mobility),
                    temperature_unc_k: Some(0.05),
                    carrier_density_m3: Some(density),
                }
            })
            .collect();
        let settings = ScatteringSettings {
            ionized_density: IonizedDensityModel::CarriersPlusCompensation,
            screening: ScreeningDensity::Compensated {
                dopant_density_m3: thickness_scale * 3e15 * CM3,
                compensating_density_m3: thickness_scale * 2e14 * CM3,
            },
            mobility_scale_relative_unc: Some(0.01),
            density_scale_relative_unc: Some(0.03),
            ..ScatteringSettings::new(silicon_electrons())
        };
        let fit = fit_mobility_scattering(&points, &settings, None).unwrap();
        let n_a = fit.compensating_density_m3.unwrap();
        compensating.record(n_a.value, n_a.uncertainty.unwrap_or(f64::NAN), 2e14 * CM3);
        let mu = fit.lattice_mobility_300k_m2_per_vs;
        lattice.record(
            mu.value,
            mu.uncertainty.unwrap_or(f64::NAN),
            model.lattice_mobility_300k_m2_per_vs,
        );
        let alpha = fit.lattice_exponent;
        exponent.record(
            alpha.value,
            alpha.uncertainty.unwrap_or(f64::NAN),
            model.lattice_exponent,
        );
    }
    for (name, coverage) in [("N_A", &compensating), ("mu_300", &lattice), ("alpha", &exponent)] {
        println!("coverage {name}: {}", coverage.describe());
        assert!(coverage.is_honest(), "{name}: {}", coverage.describe());
    }
}
