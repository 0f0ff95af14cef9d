//! Tests of the purity summary: the derived densities and their propagated uncertainties
//! (checked against a Monte Carlo of correlated densities), the type convention, the
//! comparison verdict and the refusals.

use super::*;
use mobilis_numerics::noise::Rng;

const CM3: f64 = 1e6; // cm^-3 to m^-3

fn densities(dopant_cm3: f64, compensating_cm3: f64) -> DopantDensities {
    DopantDensities {
        dopant_density_m3: dopant_cm3 * CM3,
        dopant_density_unc_m3: Some(0.05 * dopant_cm3 * CM3),
        compensating_density_m3: compensating_cm3 * CM3,
        compensating_density_unc_m3: Some(0.1 * compensating_cm3 * CM3),
        covariance_m6: None,
    }
}

fn close(actual: f64, expected: f64, relative: f64) -> bool {
    (actual - expected).abs() <= relative * expected.abs()
}

// The demo wafer's invented densities: N_D = 3e15, N_A = 2e14 cm^-3.
#[test]
fn n_type_summary_names_donors_and_acceptors() {
    let input = PurityInput {
        sample: "SiRef-centre".into(),
        carrier_type: Some(CarrierType::N),
        freeze_out: Some(densities(3e15, 2e14)),
        scattering: None,
    };
    let summary = summarize_purity(&input, &ConsistencyTolerance::default()).unwrap();
    assert_eq!(summary.donor_density_m3.unwrap().value, 3e15 * CM3);
    assert_eq!(summary.acceptor_density_m3.unwrap().value, 2e14 * CM3);
    assert!(close(summary.net_doping_m3.unwrap().value, 2.8e15 * CM3, 1e-15));
    assert!(close(
        summary.total_impurity_density_m3.unwrap().value,
        3.2e15 * CM3,
        1e-15
    ));
    assert!(close(summary.compensation_ratio.unwrap().value, 2.0 / 30.0, 1e-15));
    // Independent: u(net)^2 = u(sum)^2 = (1.5e14)^2 + (2e13)^2 cm^-6.
    let expected = (1.5e14f64.powi(2) + 2e13f64.powi(2)).sqrt() * CM3;
    assert!(close(
        summary.net_doping_m3.unwrap().uncertainty.unwrap(),
        expected,
        1e-12
    ));
    assert!(close(
        summary.total_impurity_density_m3.unwrap().uncertainty.unwrap(),
        expected,
        1e-12
    ));
    // u(K) / K = sqrt(0.05^2 + 0.1^2).
    let ratio = summary.compensation_ratio.unwrap();
    assert!(close(
        ratio.uncertainty.unwrap(),
        ratio.value * 0.05f64.hypot(0.1),
        1e-12
    ));
    assert!(summary.scattering_ionized_density_m3.is_none() && summary.comparison.is_none());
    assert!(summary.warnings.is_empty());
}

#[test]
fn p_type_compensation_ratio_is_donors_over_acceptors() {
    let input = PurityInput {
        sample: "p".into(),
        carrier_type: Some(CarrierType::P),
        freeze_out: Some(densities(5e16, 1e16)),
        scattering: None,
    };
    let summary = summarize_purity(&input, &ConsistencyTolerance::default()).unwrap();
    assert_eq!(summary.acceptor_density_m3.unwrap().value, 5e16 * CM3);
    assert_eq!(summary.donor_density_m3.unwrap().value, 1e16 * CM3);
    assert!(close(summary.compensation_ratio.unwrap().value, 0.2, 1e-15));
    // Without a carrier type the densities keep their dopant / compensating names only.
    let untyped = summarize_purity(
        &PurityInput {
            carrier_type: None,
            ..input
        },
        &ConsistencyTolerance::default(),
    )
    .unwrap();
    assert!(untyped.donor_density_m3.is_none() && untyped.acceptor_density_m3.is_none());
    assert!(close(untyped.compensation_ratio.unwrap().value, 0.2, 1e-15));
}

// Fully correlated densities with equal relative uncertainties move together, so their ratio
// does not move at all, and their difference moves by the difference of the uncertainties
// (first-order propagation, standard).
#[test]
fn covariance_enters_the_propagation() {
    let mut correlated = densities(1e16, 4e15);
    correlated.compensating_density_unc_m3 = Some(0.05 * 4e15 * CM3);
    correlated.covariance_m6 =
        Some(correlated.dopant_density_unc_m3.unwrap() * correlated.compensating_density_unc_m3.unwrap());
    assert!(correlated.compensation_ratio().uncertainty.unwrap() < 1e-12);
    let net = correlated.net_doping_m3().uncertainty.unwrap();
    assert!(close(net, (5e14 - 2e14) * CM3, 1e-9), "{net:e}");
    let total = correlated.total_impurity_density_m3().uncertainty.unwrap();
    assert!(close(total, (5e14 + 2e14) * CM3, 1e-9), "{total:e}");
}

/// Draws correlated normal (N_dop, N_comp) pairs and returns the sample standard deviations
/// of N_dop - N_comp, N_comp / N_dop and N_dop + N_comp.
fn monte_carlo(densities: &DopantDensities, draws: usize, seed: u64) -> [f64; 3] {
    let mut rng = Rng::seeded(seed);
    let (ud, uc) = (
        densities.dopant_density_unc_m3.unwrap(),
        densities.compensating_density_unc_m3.unwrap(),
    );
    let rho = densities.covariance_m6.unwrap_or(0.0) / (ud * uc);
    let mut sums = [[0.0f64; 2]; 3];
    for _ in 0..draws {
        let (z1, z2) = (rng.standard_normal(), rng.standard_normal());
        let dopant = densities.dopant_density_m3 + ud * z1;
        let compensating = densities.compensating_density_m3 + uc * (rho * z1 + (1.0 - rho * rho).sqrt() * z2);
        for (slot, value) in sums
            .iter_mut()
            .zip([dopant - compensating, compensating / dopant, dopant + compensating])
        {
            slot[0] += value;
            slot[1] += value * value;
        }
    }
    sums.map(|[sum, squares]| {
        let mean = sum / draws as f64;
        (squares / draws as f64 - mean * mean).sqrt()
    })
}

// The first-order uncertainties agree with the spread of 200000 correlated draws to within
// 2 % (small relative uncertainties, where first order holds).
#[test]
fn propagated_uncertainties_match_a_monte_carlo() {
    for (seed, correlation) in [-0.6, 0.0, 0.8].into_iter().enumerate() {
        let mut input = densities(3e15, 2e14);
        input.covariance_m6 =
            Some(correlation * input.dopant_density_unc_m3.unwrap() * input.compensating_density_unc_m3.unwrap());
        let sampled = monte_carlo(&input, 200_000, 40 + seed as u64);
        let propagated = [
            input.net_doping_m3().uncertainty.unwrap(),
            input.compensation_ratio().uncertainty.unwrap(),
            input.total_impurity_density_m3().uncertainty.unwrap(),
        ];
        for (what, (sampled, propagated)) in ["net", "ratio", "total"].iter().zip(sampled.iter().zip(propagated)) {
            assert!(
                close(propagated, *sampled, 0.02),
                "rho {correlation}: {what} {propagated:e} against {sampled:e}"
            );
        }
    }
}

#[test]
fn comparison_verdict() {
    let tolerance = ConsistencyTolerance::default();
    let estimate = |value: f64, relative: f64| Estimate {
        value,
        uncertainty: Some(relative * value),
    };
    // Equal: 0 sigma.
    let same = compare_densities(
        "x",
        estimate(1e21, 0.1),
        estimate(1e21, 0.1),
        ReferenceBasis::TotalImpurities,
        &tolerance,
    );
    assert!(same.consistent && same.deviation_sigma == 0.0 && same.ratio == 1.0);
    // ln 1.5 / sqrt(0.1^2 + 0.1^2 + 0.7^2) = 0.5678: consistent at 2 sigma (computed from the
    // rule of the module documentation with the default theory uncertainty 0.7).
    let near = compare_densities(
        "x",
        estimate(1.5e21, 0.1),
        estimate(1e21, 0.1),
        ReferenceBasis::TotalImpurities,
        &tolerance,
    );
    assert!(close(near.deviation_sigma, 1.5f64.ln() / 0.51f64.sqrt(), 1e-12));
    assert!(near.consistent);
    assert!(close(near.ratio_unc.unwrap(), 1.5 * 0.02f64.sqrt(), 1e-12));
    // A factor 5: ln 5 / sqrt(0.51) = 2.25 sigma, inconsistent; symmetric in which side is
    // larger.
    let far = compare_densities(
        "x",
        estimate(5e21, 0.1),
        estimate(1e21, 0.1),
        ReferenceBasis::TotalImpurities,
        &tolerance,
    );
    let far_inverse = compare_densities(
        "x",
        estimate(1e21, 0.1),
        estimate(5e21, 0.1),
        ReferenceBasis::TotalImpurities,
        &tolerance,
    );
    assert!(!far.consistent && close(far.deviation_sigma, far_inverse.deviation_sigma, 1e-12));
    // A wider tolerance accepts it.
    let lenient = ConsistencyTolerance {
        sigma_multiple: 4.0,
        ..tolerance
    };
    assert!(
        compare_densities(
            "x",
            estimate(5e21, 0.1),
            estimate(1e21, 0.1),
            ReferenceBasis::TotalImpurities,
            &lenient
        )
        .consistent
    );
    // No uncertainties and no theory uncertainty: only equal values agree.
    let strict = ConsistencyTolerance {
        sigma_multiple: 2.0,
        model_relative_uncertainty: 0.0,
    };
    let bare = |value| Estimate {
        value,
        uncertainty: None,
    };
    let unequal = compare_densities("x", bare(1.01), bare(1.0), ReferenceBasis::TotalImpurities, &strict);
    assert!(!unequal.consistent && unequal.deviation_sigma.is_infinite() && unequal.ratio_unc.is_none());
    assert!(compare_densities("x", bare(1.0), bare(1.0), ReferenceBasis::TotalImpurities, &strict).consistent);
}

#[test]
fn both_fits_side_by_side() {
    let scattering = ScatteringDensities {
        ionized_impurity_density_m3: Estimate {
            value: 3.0e15 * CM3,
            uncertainty: Some(0.3e15 * CM3),
        },
        compensating_density_m3: None,
        comparison: None,
        upper_limit_m3: None,
    };
    let input = PurityInput {
        sample: "s".into(),
        carrier_type: Some(CarrierType::N),
        freeze_out: Some(densities(3e15, 2e14)),
        scattering: Some(scattering),
    };
    let summary = summarize_purity(&input, &ConsistencyTolerance::default()).unwrap();
    let comparison = summary.comparison.unwrap();
    assert_eq!(comparison.basis, ReferenceBasis::TotalImpurities);
    assert!(close(comparison.ratio, 3.0 / 3.2, 1e-12));
    assert!(comparison.consistent);
    assert_eq!(summary.scattering_ionized_density_m3.unwrap().value, 3.0e15 * CM3);

    // A comparison made by the scattering fit (its own reference) is kept, judged with this
    // tolerance.
    let made = compare_densities(
        "ionized_impurity_density",
        scattering.ionized_impurity_density_m3,
        Estimate {
            value: 3e14 * CM3,
            uncertainty: Some(3e13 * CM3),
        },
        ReferenceBasis::IonizedAtFitTemperatures,
        &ConsistencyTolerance::default(),
    );
    assert!(!made.consistent);
    let with_made = PurityInput {
        scattering: Some(ScatteringDensities {
            comparison: Some(made),
            ..scattering
        }),
        ..input.clone()
    };
    let summary = summarize_purity(&with_made, &ConsistencyTolerance::default()).unwrap();
    assert_eq!(
        summary.comparison.unwrap().basis,
        ReferenceBasis::IonizedAtFitTemperatures
    );
    assert!(
        summary.warnings.iter().any(|w| w.contains("disagree")),
        "{:?}",
        summary.warnings
    );
    let lenient = ConsistencyTolerance {
        sigma_multiple: 10.0,
        model_relative_uncertainty: 0.3,
    };
    assert!(
        summarize_purity(&with_made, &lenient)
            .unwrap()
            .comparison
            .unwrap()
            .consistent
    );

    // A compensating density from the scattering fit is compared with the freeze-out one.
    let compensating = PurityInput {
        scattering: Some(ScatteringDensities {
            compensating_density_m3: Some(Estimate {
                value: 2.2e14 * CM3,
                uncertainty: Some(0.2e14 * CM3),
            }),
            ..scattering
        }),
        ..input
    };
    let comparison = summarize_purity(&compensating, &ConsistencyTolerance::default())
        .unwrap()
        .comparison
        .unwrap();
    assert_eq!(comparison.basis, ReferenceBasis::CompensatingDensity);
    assert!(close(comparison.ratio, 1.1, 1e-12) && comparison.consistent);
}

#[test]
fn only_the_scattering_fit() {
    let input = PurityInput {
        sample: "s".into(),
        carrier_type: None,
        freeze_out: None,
        scattering: Some(ScatteringDensities {
            ionized_impurity_density_m3: Estimate {
                value: 1e21,
                uncertainty: None,
            },
            compensating_density_m3: None,
            comparison: None,
            upper_limit_m3: None,
        }),
    };
    let summary = summarize_purity(&input, &ConsistencyTolerance::default()).unwrap();
    assert_eq!(summary.scattering_ionized_density_m3.unwrap().value, 1e21);
    assert!(summary.net_doping_m3.is_none() && summary.comparison.is_none());
}

#[test]
fn over_compensation_is_reported_not_hidden() {
    let input = PurityInput {
        sample: "s".into(),
        carrier_type: Some(CarrierType::N),
        freeze_out: Some(densities(1e15, 3e15)),
        scattering: None,
    };
    let summary = summarize_purity(&input, &ConsistencyTolerance::default()).unwrap();
    assert!(close(summary.net_doping_m3.unwrap().value, 2e15 * CM3, 1e-15));
    assert!(summary.compensation_ratio.unwrap().value > 1.0);
    assert!(summary.warnings[0].contains("contradicts the carrier type"));
}

#[test]
fn refuses_invalid_densities() {
    let tolerance = ConsistencyTolerance::default();
    let run = |freeze_out: DopantDensities| {
        summarize_purity(
            &PurityInput {
                sample: "s".into(),
                carrier_type: None,
                freeze_out: Some(freeze_out),
                scattering: None,
            },
            &tolerance,
        )
    };
    let cases: [(DopantDensities, &str); 5] = [
        (
            DopantDensities {
                dopant_density_m3: 0.0,
                ..densities(1e15, 1e14)
            },
            "dopant_density_m3",
        ),
        (
            DopantDensities {
                compensating_density_m3: f64::NAN,
                ..densities(1e15, 1e14)
            },
            "compensating_density_m3",
        ),
        (
            DopantDensities {
                dopant_density_unc_m3: Some(-1.0),
                ..densities(1e15, 1e14)
            },
            "dopant_density_m3_unc",
        ),
        (
            DopantDensities {
                covariance_m6: Some(1e60),
                ..densities(1e15, 1e14)
            },
            "dopant_compensating_covariance_m6",
        ),
        (
            DopantDensities {
                compensating_density_unc_m3: None,
                covariance_m6: Some(0.0),
                ..densities(1e15, 1e14)
            },
            "dopant_compensating_covariance_m6",
        ),
    ];
    for (input, expected) in cases {
        let error = run(input).unwrap_err();
        let PurityError::InvalidInput { name, .. } = &error;
        assert_eq!(*name, expected);
        assert!(!error.to_string().ends_with('.'));
    }
    let bad_tolerance = ConsistencyTolerance {
        sigma_multiple: 2.0,
        model_relative_uncertainty: -0.1,
    };
    assert!(summarize_purity(
        &PurityInput {
            sample: "s".into(),
            carrier_type: None,
            freeze_out: None,
            scattering: None
        },
        &bad_tolerance
    )
    .is_err());
    // A missing uncertainty leaves the derived uncertainties out, not zero.
    let partial = DopantDensities {
        compensating_density_unc_m3: None,
        ..densities(1e15, 1e14)
    };
    assert_eq!(partial.net_doping_m3().uncertainty, None);
    assert_eq!(partial.compensation_ratio().uncertainty, None);
}
