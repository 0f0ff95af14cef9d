//! Recovery of known carriers from synthetic sweeps, the envelope's bound property and
//! closed forms, bad input, cancellation and the benchmark case.
//!
//! Every synthetic sweep comes from `mobilis_physics::forward::tensor` (the Drude sums of
//! Beck and Anderson, J. Appl. Phys. 62, 541, 1987, tested there against values computed
//! from those sums)
//! and goes through the same symmetrization and tensor inversion as measured data.

use std::cell::{Cell, RefCell};

use super::data::{Data, Grid};
use super::envelope::Envelope;
use super::regularized::l_curve_corner;
use super::*;
use mobilis_physics::forward::tensor::{
    conductivity_tensor, symmetric_fields, synthetic_sweep, Carrier, SweepImperfections, SweepNoise,
};
use mobilis_physics::sweep::SweepError;
use mobilis_sdk::sdk::AnalysisError;

mod coverage;

/// A synthetic sweep of `carriers` from -`max_field_t` to +`max_field_t` with `steps`
/// fields per sign and Gaussian noise of `relative` |rho| plus a floor of a tenth of that at
/// the zero-field rho_xx (so that uncertainties are attached), with a Hall misalignment that
/// the symmetrization must remove.
fn sweep(carriers: &[Carrier], max_field_t: f64, steps: usize, relative: f64, seed: u64) -> Vec<SweepPoint> {
    let fields = symmetric_fields(max_field_t, steps).unwrap();
    let rho_0 = 1.0 / conductivity_tensor(carriers, 0.0).unwrap().sigma_xx_s;
    let noise = SweepNoise {
        absolute_ohm: 0.1 * relative * rho_0,
        relative,
    };
    let imperfections = SweepImperfections {
        hall_misalignment: 0.01,
        longitudinal_hall_pickup: 0.0,
    };
    synthetic_sweep(carriers, &fields, &noise, &imperfections, &mut Rng::seeded(seed)).unwrap()
}

/// The symmetrized conductivity points of [`sweep`].
fn measured(carriers: &[Carrier], max_field_t: f64, steps: usize, relative: f64, seed: u64) -> Vec<TensorPoint> {
    let symmetrized = symmetrize(
        &sweep(carriers, max_field_t, steps, relative, seed),
        &SymmetrizeSettings::default(),
    )
    .unwrap();
    conductivity_points(&symmetrized)
}

/// Exact tensor points of `carriers` at `fields`, without uncertainties.
fn exact(carriers: &[Carrier], fields: &[f64]) -> Vec<TensorPoint> {
    fields
        .iter()
        .map(|&b| {
            let sigma = conductivity_tensor(carriers, b).unwrap();
            TensorPoint::new(b, sigma.sigma_xx_s, sigma.sigma_xy_s)
        })
        .collect()
}

fn linear_fields(max_field_t: f64, count: usize) -> Vec<f64> {
    (0..count)
        .map(|k| max_field_t * k as f64 / (count - 1) as f64)
        .collect()
}

fn describe(result: &MobilitySpectrum) -> String {
    let mut text = format!(
        "rule {:?} lambda {:.3e} chi2 {:.4e} / {} ({} trials)\n",
        result.regularization.rule,
        result.regularization.lambda,
        result.regularization.chi_square,
        result.regularization.data_count,
        result.regularization.trials.len(),
    );
    for peak in &result.peaks {
        text += &format!(
            "  {:?} mu {:.4} +- {:.2e} (top {:.4}) n {:.4e} +- {:.2e} fraction {:.3} edge {}\n",
            peak.carrier,
            peak.mobility_m2_per_vs,
            peak.mobility_unc_m2_per_vs,
            peak.peak_mobility_m2_per_vs,
            peak.sheet_density_m2,
            peak.sheet_density_unc_m2,
            peak.conductance_fraction,
            peak.at_grid_edge
        );
    }
    for warning in &result.warnings {
        text += &format!("  warning: {warning}\n");
    }
    text
}

/// Every true carrier has a peak of its kind with mobility and sheet density within the
/// relative tolerances, and every other peak holds less than `stray` of the conductance.
fn assert_recovered(
    result: &MobilitySpectrum,
    carriers: &[Carrier],
    mobility_tolerance: f64,
    density_tolerance: f64,
    stray: f64,
) {
    let mut matched = vec![false; result.peaks.len()];
    for carrier in carriers {
        let best = result
            .peaks
            .iter()
            .enumerate()
            .filter(|(_, p)| p.carrier == carrier.kind)
            .min_by(|(_, a), (_, b)| {
                let distance = |p: &Peak| (p.mobility_m2_per_vs / carrier.mobility_m2_per_vs).ln().abs();
                distance(a).total_cmp(&distance(b))
            });
        let Some((index, peak)) = best else {
            panic!("no {:?} peak for {carrier:?}\n{}", carrier.kind, describe(result));
        };
        matched[index] = true;
        let mobility_error = peak.mobility_m2_per_vs / carrier.mobility_m2_per_vs - 1.0;
        let density_error = peak.sheet_density_m2 / carrier.sheet_density_m2 - 1.0;
        assert!(
            mobility_error.abs() <= mobility_tolerance && density_error.abs() <= density_tolerance,
            "{carrier:?}: mobility off by {mobility_error:.4}, density by {density_error:.4}\n{}",
            describe(result)
        );
        assert!(peak.mobility_unc_m2_per_vs > 0.0 && peak.sheet_density_unc_m2 > 0.0);
    }
    for (peak, matched) in result.peaks.iter().zip(matched) {
        assert!(
            matched || peak.conductance_fraction < stray,
            "stray peak {peak:?}\n{}",
            describe(result)
        );
    }
}

// ---------------------------------------------------------------------------------------
// Recovery

#[test]
fn mobility_spectrum_recovers_one_carrier_of_either_sign() {
    // Densities over two decades, mobilities from 0.15 to 2 m^2/(V s), 0.1 % noise to 9 T.
    let cases = [
        Carrier::electron(1e15, 2.0),
        Carrier::hole(1e17, 0.15),
        Carrier::electron(3e16, 0.4),
        Carrier::hole(5e15, 1.1),
    ];
    for (seed, carrier) in cases.iter().enumerate() {
        let points = measured(&[*carrier], 9.0, 60, 1e-3, seed as u64);
        let result = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap();
        assert_recovered(&result, &[*carrier], 0.02, 0.02, 0.02);
        // The whole conductance is in the spectrum: sigma_xx(0) is a data point.
        let sigma_0 = carrier.sheet_conductance_s();
        assert!(
            (result.total_conductance_s / sigma_0 - 1.0).abs() < 5e-3,
            "{}",
            describe(&result)
        );
        assert_eq!(result.regularization.rule, RuleUsed::Discrepancy);
    }
}

#[test]
fn mobility_spectrum_recovers_two_carriers() {
    // (carriers, mobility ratio): opposite signs, same sign, a minority carrier.
    let cases: [[Carrier; 2]; 4] = [
        [Carrier::electron(5e15, 1.2), Carrier::hole(2e16, 0.08)],
        [Carrier::electron(2e15, 3.0), Carrier::electron(4e16, 0.25)],
        [Carrier::hole(1e16, 1.5), Carrier::hole(1e17, 0.15)],
        [Carrier::hole(3e16, 0.3), Carrier::electron(1e15, 4.0)],
    ];
    for (seed, carriers) in cases.iter().enumerate() {
        let points = measured(carriers, 9.0, 80, 1e-3, 10 + seed as u64);
        let result = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap();
        assert_recovered(&result, carriers, 0.05, 0.05, 0.03);
    }
}

#[test]
fn mobility_spectrum_recovers_three_carriers() {
    // A high-mobility 2D electron gas, bulk holes and a low-mobility parallel electron
    // layer; and a hole-dominated set with two electron species.
    let cases: [[Carrier; 3]; 2] = [
        [
            Carrier::electron(3e15, 3.0),
            Carrier::hole(3e16, 0.3),
            Carrier::electron(1e17, 0.06),
        ],
        [
            Carrier::hole(2e17, 0.05),
            Carrier::electron(4e15, 0.6),
            Carrier::electron(5e14, 6.0),
        ],
    ];
    for (seed, carriers) in cases.iter().enumerate() {
        let points = measured(carriers, 14.0, 100, 5e-4, 20 + seed as u64);
        let result = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap();
        assert_recovered(&result, carriers, 0.1, 0.1, 0.03);
    }
}

#[test]
fn mobility_spectrum_without_uncertainties_uses_the_l_curve_and_still_recovers() {
    let carriers = [Carrier::electron(5e15, 1.2), Carrier::hole(2e16, 0.08)];
    let bare: Vec<TensorPoint> = measured(&carriers, 9.0, 60, 1e-3, 1)
        .into_iter()
        .map(|p| TensorPoint { uncertainty: None, ..p })
        .collect();
    let result = mobility_spectrum(&bare, &SpectrumSettings::default(), &Unmonitored).unwrap();
    assert_eq!(result.regularization.rule, RuleUsed::LCurve);
    assert_recovered(&result, &carriers, 0.05, 0.05, 0.03);
}

// ---------------------------------------------------------------------------------------
// Regularization

#[test]
fn discrepancy_choice_is_the_smoothest_spectrum_within_the_noise() {
    // 1 % noise: the grid's discretization error is far below the noise, so chi-square = m
    // is reachable and the principle applies as stated. (With this seed the true carriers
    // give chi-square 109 for the 121 data, a typical draw.)
    let carriers = [Carrier::electron(5e15, 1.2), Carrier::hole(2e16, 0.08)];
    let points = measured(&carriers, 9.0, 60, 1e-2, 4);
    let result = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap();
    let regularization = &result.regularization;
    let m = regularization.data_count as f64;
    assert_eq!(regularization.rule, RuleUsed::Discrepancy);
    assert!(regularization.chi_square <= m, "{regularization:?}");
    for trial in &regularization.trials {
        if trial.lambda > regularization.lambda * (1.0 + 1e-12) {
            assert!(trial.chi_square > m, "{trial:?} is smoother and within the noise");
        }
    }
    // The chosen spectrum's misfit matches the stated noise: the last bisection step is
    // within a factor 10^(1/96) in lambda of the crossing.
    assert!(regularization.chi_square > 0.8 * m, "{regularization:?}");
    // A stronger penalty than chosen broadens the peaks; a fixed weaker one fits better.
    let fixed = SpectrumSettings {
        rule: RegularizationRule::Fixed(regularization.lambda / 100.0),
        ..SpectrumSettings::default()
    };
    let weaker = mobility_spectrum(&points, &fixed, &Unmonitored).unwrap();
    assert_eq!(weaker.regularization.rule, RuleUsed::Fixed);
    assert!(weaker.regularization.chi_square < regularization.chi_square);
    assert!(weaker.regularization.roughness > regularization.roughness);
}

#[test]
fn l_curve_corner_of_a_known_curve() {
    // An L with its corner at index 4: along the x axis from x = 8 to x = 0, then up.
    let points: Vec<(f64, f64)> = [8.0, 6.0, 4.0, 2.0, 0.0]
        .iter()
        .map(|&x| (x, 0.0))
        .chain([2.0, 4.0, 6.0].iter().map(|&y| (0.0, y)))
        .collect();
    assert_eq!(l_curve_corner(&points), 4);
    // A smooth hyperbola x y = 1 traversed from large x: curvature is largest at the
    // vertex (1, 1), which is sample 5 of x = 2^(2 - k/2).
    let hyperbola: Vec<(f64, f64)> = (0..11)
        .map(|k| {
            let x = 2f64.powf(2.5 - k as f64 / 2.0);
            (x, 1.0 / x)
        })
        .collect();
    assert_eq!(l_curve_corner(&hyperbola), 5);
    // Turning the wrong way everywhere (a concave curve) falls back to the chord rule.
    let concave: Vec<(f64, f64)> = (0..5)
        .map(|k| (4.0 - k as f64, 4.0 - (k as f64 - 4.0).powi(2) / 4.0))
        .collect();
    let corner = l_curve_corner(&concave);
    assert!(corner > 0 && corner < 4);
}

// ---------------------------------------------------------------------------------------
// Envelope

fn envelope_of(points: &[TensorPoint]) -> (Data, Envelope) {
    let data = Data::new(points).unwrap();
    // The fitted tensor equal to the data: the loading is the rounding floor only.
    let envelope = Envelope::new(&data, &data.sigma, &|| false).unwrap();
    (data, envelope)
}

#[test]
fn envelope_of_exact_one_carrier_data_peaks_at_its_conductance() {
    // For exact data of one carrier the Pick matrix is sigma a a^H, and the bound at the
    // carrier's own mobility is its conductance exactly (derivation in `envelope`).
    let fields = linear_fields(9.0, 30);
    for carrier in [Carrier::electron(2e15, 1.7), Carrier::hole(4e16, 0.23)] {
        let (_, envelope) = envelope_of(&exact(&[carrier], &fields));
        let sigma = carrier.sheet_conductance_s();
        let mu = carrier.kind.charge_sign() * carrier.mobility_m2_per_vs;
        let at = envelope.bound(mu);
        assert!((at / sigma - 1.0).abs() < 1e-6, "{carrier:?}: {at} vs {sigma}");
        for other in [1.5 * mu, mu / 1.5, -mu, 3.0 * mu] {
            assert!(
                envelope.bound(other) < 1e-3 * sigma,
                "{carrier:?} at {other}: {}",
                envelope.bound(other)
            );
        }
    }
}

#[test]
fn envelope_bounds_every_carrier_of_exact_multi_carrier_data() {
    let carriers = [
        Carrier::electron(3e15, 3.0),
        Carrier::hole(3e16, 0.3),
        Carrier::electron(1e17, 0.06),
    ];
    let points = exact(&carriers, &linear_fields(14.0, 40));
    let (_, envelope) = envelope_of(&points);
    let total: f64 = carriers.iter().map(Carrier::sheet_conductance_s).sum();
    for carrier in &carriers {
        let mu = carrier.kind.charge_sign() * carrier.mobility_m2_per_vs;
        let bound = envelope.bound(mu);
        let sigma = carrier.sheet_conductance_s();
        // Upper bound, attained to rounding by exact data.
        assert!(
            bound >= sigma * (1.0 - 1e-6) && bound <= total,
            "{carrier:?}: {bound} vs {sigma}"
        );
    }
}

#[test]
fn envelope_with_one_field_is_the_closed_form() {
    // With one field the bound is sigma_xx(B) (1 + mu^2 B^2) (derived in `envelope`; the
    // one-field case of the Pick matrix). Built directly: `Data::new` asks for more fields.
    let carriers = [Carrier::electron(2e16, 0.5), Carrier::hole(5e16, 0.1)];
    let b = 2.0;
    let sigma = conductivity_tensor(&carriers, b).unwrap();
    let data = Data {
        fields: vec![b],
        sigma: vec![(sigma.sigma_xx_s, sigma.sigma_xy_s)],
        noise_scale: vec![sigma.sigma_xx_s.hypot(sigma.sigma_xy_s)],
        uncertainties: None,
        has_uncertainties: false,
        rows: Vec::new(),
        reference_s: sigma.sigma_xx_s,
        max_field_t: b,
        min_nonzero_field_t: b,
    };
    let envelope = Envelope::new(&data, &data.sigma, &|| false).unwrap();
    for mu in [-3.0, -0.5, -0.01, 0.02, 0.4, 7.0] {
        let expected = sigma.sigma_xx_s * (1.0 + mu * mu * b * b);
        assert!(
            (envelope.bound(mu) / expected - 1.0).abs() < 1e-9,
            "{mu}: {} vs {expected}",
            envelope.bound(mu)
        );
    }
}

#[test]
fn envelope_of_noisy_data_bounds_the_truth_and_the_regularized_spectrum() {
    let carriers = [Carrier::electron(5e15, 1.2), Carrier::hole(2e16, 0.08)];
    let points = measured(&carriers, 9.0, 60, 1e-3, 5);
    let result = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap();
    // Every grid carrier of the regularized spectrum is under the envelope (guaranteed by
    // the loading; 1e-9 for rounding).
    for spectrum in [&result.electron, &result.hole] {
        for (x, bound) in spectrum.conductance_s.iter().zip(&spectrum.envelope_s) {
            assert!(*x <= bound * (1.0 + 1e-9), "{x} above {bound}");
        }
    }
    // The true carriers are under it too (the loading covers the expected noise).
    let data = Data::new(&points).unwrap();
    let fitted: Vec<(f64, f64)> = result
        .fit
        .iter()
        .map(|f| (f.fit_sigma_xx_s, f.fit_sigma_xy_s))
        .collect();
    let envelope = Envelope::new(&data, &fitted, &|| false).unwrap();
    for carrier in &carriers {
        let mu = carrier.kind.charge_sign() * carrier.mobility_m2_per_vs;
        assert!(
            envelope.bound(mu) >= carrier.sheet_conductance_s(),
            "{carrier:?}: {}",
            envelope.bound(mu)
        );
    }
    // And it still discriminates: far from the carriers it is a small fraction of them.
    let total: f64 = carriers.iter().map(Carrier::sheet_conductance_s).sum();
    for mu in [-0.08, 1.2, -0.015, 0.015] {
        assert!(envelope.bound(mu) < 0.25 * total, "{mu}: {}", envelope.bound(mu));
    }
}

// ---------------------------------------------------------------------------------------
// Bad input

// One field sign with rho_xy is used as measured (rho_xx even, rho_xy odd in B; Onsager
// 1931): the one electron comes out as from both branches. Zero-field readings alone are
// refused.
#[test]
fn mobility_spectrum_accepts_a_sweep_with_one_field_sign() {
    let carriers = [Carrier::electron(5e15, 1.2)];
    let positive: Vec<SweepPoint> = sweep(&carriers, 9.0, 20, 1e-3, 1)
        .into_iter()
        .filter(|p| p.field_t >= 0.0)
        .collect();
    let result = mobility_spectrum_of_sweep(
        &positive,
        &SymmetrizeSettings::default(),
        &SpectrumSettings::default(),
        &Unmonitored,
    )
    .unwrap();
    let peak = result
        .peaks
        .iter()
        .max_by(|a, b| a.conductance_s.total_cmp(&b.conductance_s))
        .unwrap();
    assert_eq!(peak.carrier, CarrierKind::Electron);
    assert!((peak.sheet_density_m2 / 5e15 - 1.0).abs() < 0.1, "{peak:?}");
    let zero: Vec<SweepPoint> = positive.iter().filter(|p| p.field_t == 0.0).copied().collect();
    let error = mobility_spectrum_of_sweep(
        &zero,
        &SymmetrizeSettings::default(),
        &SpectrumSettings::default(),
        &Unmonitored,
    )
    .unwrap_err();
    assert!(
        matches!(error, SpectrumError::Sweep(SweepError::ZeroFieldOnly { .. })),
        "{error:?}"
    );
    assert!(!error.to_string().ends_with('.'));
}

#[test]
fn mobility_spectrum_refuses_too_few_fields() {
    // Three nonzero fields (and zero): fewer distinct fields than a spectrum needs.
    let carriers = [Carrier::electron(5e15, 1.2), Carrier::hole(2e16, 0.08)];
    let points = exact(&carriers, &[0.0, 1.0, 2.0, 3.0]);
    let error = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap_err();
    assert_eq!(
        error,
        SpectrumError::TooFewFields {
            distinct: 3,
            required: MIN_DISTINCT_FIELDS
        }
    );
    assert!(error.to_string().contains("measure more fields"), "{error}");
    // Repeats of one field do not count twice.
    let repeated = exact(&carriers, &[0.0, 1.0, 1.0, 2.0, 2.0, 3.0]);
    assert!(matches!(
        mobility_spectrum(&repeated, &SpectrumSettings::default(), &Unmonitored),
        Err(SpectrumError::TooFewFields { distinct: 3, .. })
    ));
    assert_eq!(
        mobility_spectrum(&[], &SpectrumSettings::default(), &Unmonitored).unwrap_err(),
        SpectrumError::NoPoints
    );
}

#[test]
fn mobility_spectrum_refuses_nonpositive_rho_xx_and_sigma_xx() {
    let carriers = [Carrier::electron(5e15, 1.2)];
    let mut raw = sweep(&carriers, 9.0, 20, 1e-3, 1);
    raw[7].rho_xx_ohm_sq = -raw[7].rho_xx_ohm_sq;
    let error = mobility_spectrum_of_sweep(
        &raw,
        &SymmetrizeSettings::default(),
        &SpectrumSettings::default(),
        &Unmonitored,
    )
    .unwrap_err();
    assert!(
        matches!(
            error,
            SpectrumError::Sweep(SweepError::NonPositiveRhoXx { index: 7, .. })
        ),
        "{error:?}"
    );
    raw[7].rho_xx_ohm_sq = 0.0;
    assert!(mobility_spectrum_of_sweep(
        &raw,
        &SymmetrizeSettings::default(),
        &SpectrumSettings::default(),
        &Unmonitored
    )
    .is_err());

    let mut points = exact(&carriers, &linear_fields(9.0, 10));
    points[4].sigma_xx_s = 0.0;
    let error = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap_err();
    assert!(
        matches!(error, SpectrumError::NonPositiveConductivity { index: 4, .. }),
        "{error:?}"
    );
    assert!(error.to_string().contains("point 4"), "{error}");
}

#[test]
fn mobility_spectrum_refuses_nans_and_negative_fields() {
    let carriers = [Carrier::electron(5e15, 1.2)];
    let mut raw = sweep(&carriers, 9.0, 20, 1e-3, 1);
    raw[3].rho_xy_ohm = f64::NAN;
    let error = mobility_spectrum_of_sweep(
        &raw,
        &SymmetrizeSettings::default(),
        &SpectrumSettings::default(),
        &Unmonitored,
    )
    .unwrap_err();
    assert!(
        matches!(error, SpectrumError::Sweep(SweepError::NonFinite { index: 3, .. })),
        "{error:?}"
    );

    let good = exact(&carriers, &linear_fields(9.0, 10));
    for (index, quantity) in [(2, "field_T"), (5, "sigma_xx_s"), (9, "sigma_xy_s")] {
        let mut points = good.clone();
        match quantity {
            "field_T" => points[index].field_t = f64::NAN,
            "sigma_xx_s" => points[index].sigma_xx_s = f64::INFINITY,
            _ => points[index].sigma_xy_s = f64::NAN,
        }
        let error = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap_err();
        assert!(
            matches!(error, SpectrumError::NonFinite { index: i, quantity: q, .. } if i == index && q == quantity),
            "{error:?}"
        );
    }
    let mut points = good.clone();
    points[6].field_t = -points[6].field_t;
    let error = mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap_err();
    assert!(
        matches!(error, SpectrumError::NegativeField { index: 6, .. }),
        "{error:?}"
    );
    assert!(error.to_string().contains("symmetrize"), "{error}");

    // Uncertainties on some points only, or a zero uncertainty.
    let mut points = good.clone();
    points[1] = points[1].with_uncertainty(TensorUncertainty {
        sigma_xx_s: 1e-6,
        sigma_xy_s: 1e-6,
        correlation: 0.0,
    });
    assert_eq!(
        mobility_spectrum(&points, &SpectrumSettings::default(), &Unmonitored).unwrap_err(),
        SpectrumError::MixedUncertainties { with: 1, without: 9 }
    );
    let zero: Vec<TensorPoint> = good
        .iter()
        .map(|p| {
            p.with_uncertainty(TensorUncertainty {
                sigma_xx_s: 0.0,
                sigma_xy_s: 1e-6,
                correlation: 0.0,
            })
        })
        .collect();
    assert!(matches!(
        mobility_spectrum(&zero, &SpectrumSettings::default(), &Unmonitored),
        Err(SpectrumError::InvalidUncertainty { index: 0, .. })
    ));
}

#[test]
fn mobility_spectrum_refuses_bad_settings() {
    let carriers = [Carrier::electron(5e15, 1.2)];
    let points = exact(&carriers, &linear_fields(9.0, 10));
    let bad = [
        SpectrumSettings {
            points_per_sign: 3,
            ..SpectrumSettings::default()
        },
        SpectrumSettings {
            peak_threshold: 0.0,
            ..SpectrumSettings::default()
        },
        SpectrumSettings {
            rule: RegularizationRule::Fixed(-1.0),
            ..SpectrumSettings::default()
        },
        SpectrumSettings {
            mobility_range: Some(GridRange {
                min_mobility_m2_per_vs: 1.0,
                max_mobility_m2_per_vs: 0.5,
            }),
            ..SpectrumSettings::default()
        },
        SpectrumSettings {
            uncertainty_replicas: 5000,
            ..SpectrumSettings::default()
        },
    ];
    for settings in bad {
        let error = mobility_spectrum(&points, &settings, &Unmonitored).unwrap_err();
        assert!(
            matches!(error, SpectrumError::InvalidSetting { .. }),
            "{settings:?}: {error:?}"
        );
        assert!(!error.to_string().ends_with('.'), "{error}");
        assert!(matches!(AnalysisError::from(error), AnalysisError::InvalidInput(_)));
    }
    let discrepancy = SpectrumSettings {
        rule: RegularizationRule::Discrepancy,
        ..SpectrumSettings::default()
    };
    let error = mobility_spectrum(&points, &discrepancy, &Unmonitored).unwrap_err();
    assert_eq!(error, SpectrumError::DiscrepancyNeedsUncertainties);
    assert!(error.to_string().contains("L-curve"), "{error}");
    assert_eq!(AnalysisError::from(SpectrumError::Cancelled), AnalysisError::Cancelled);
}

// ---------------------------------------------------------------------------------------
// Grid, progress, cancellation

#[test]
fn grid_is_logarithmic_and_defaults_to_the_field_window() {
    let grid = Grid::logarithmic(0.01, 100.0, 5);
    for (got, want) in grid.mobilities.iter().zip([0.01, 0.1, 1.0, 10.0, 100.0]) {
        assert!((got / want - 1.0).abs() < 1e-14, "{got} vs {want}");
    }
    assert!((grid.log_step - 10f64.ln()).abs() < 1e-14);
    assert_eq!((grid.signed_mobility(0), grid.signed_mobility(5)), (-0.01, 0.01));
    let data = Data::new(&exact(&[Carrier::hole(1e16, 0.3)], &linear_fields(10.0, 11))).unwrap();
    let grid = Grid::new(&SpectrumSettings::default(), &data).unwrap();
    assert!((grid.mobilities[0] - 0.01).abs() < 1e-15 && (grid.mobilities[199] - 10.0).abs() < 1e-12);
}

/// Records progress and cancels once `cancel_after` cancel checks have been made.
struct Recorder {
    progress: RefCell<Vec<f64>>,
    checks: Cell<usize>,
    cancel_after: usize,
}

impl Recorder {
    fn new(cancel_after: usize) -> Self {
        Recorder {
            progress: RefCell::new(Vec::new()),
            checks: Cell::new(0),
            cancel_after,
        }
    }
}

impl Monitor for Recorder {
    fn progress(&self, fraction: f64, _message: &str) {
        self.progress.borrow_mut().push(fraction);
    }

    fn is_cancelled(&self) -> bool {
        self.checks.set(self.checks.get() + 1);
        self.checks.get() > self.cancel_after
    }
}

#[test]
fn mobility_spectrum_reports_progress_and_stops_when_cancelled() {
    let carriers = [Carrier::electron(5e15, 1.2), Carrier::hole(2e16, 0.08)];
    let points = measured(&carriers, 9.0, 60, 1e-3, 1);
    let watcher = Recorder::new(usize::MAX);
    let result = mobility_spectrum(&points, &SpectrumSettings::default(), &watcher).unwrap();
    assert!(!result.peaks.is_empty());
    let progress = watcher.progress.borrow().clone();
    assert!(progress.windows(2).all(|pair| pair[0] <= pair[1]), "{progress:?}");
    assert_eq!((progress[0], *progress.last().unwrap()), (0.0, 1.0));
    let total_checks = watcher.checks.get();
    assert!(total_checks > 100, "{total_checks}");
    // Cancelled at several depths (early, inside the NNLS iterations, during the envelope
    // or bootstrap): it stops at the first check that says so.
    for cancel_after in [0, 5, total_checks / 3, total_checks - 3] {
        let cancelling = Recorder::new(cancel_after);
        let error = mobility_spectrum(&points, &SpectrumSettings::default(), &cancelling).unwrap_err();
        assert_eq!(error, SpectrumError::Cancelled);
        assert_eq!(
            cancelling.checks.get(),
            cancel_after + 1,
            "checks after the cancel request"
        );
    }
}

// ---------------------------------------------------------------------------------------
// Benchmark

/// The benchmark case of the issue: 140 fields (zero and 139 positive, from a symmetric
/// sweep to 9 T) and a grid of 200 mobilities per carrier sign, three carriers, 0.05 %
/// noise.
pub(super) fn benchmark_case() -> (Vec<TensorPoint>, SpectrumSettings, [Carrier; 3]) {
    let carriers = [
        Carrier::electron(3e15, 3.0),
        Carrier::hole(3e16, 0.3),
        Carrier::electron(1e17, 0.06),
    ];
    let points = measured(&carriers, 9.0, 139, 5e-4, 140);
    let settings = SpectrumSettings {
        points_per_sign: 200,
        ..SpectrumSettings::default()
    };
    (points, settings, carriers)
}

#[test]
fn benchmark_grid_200_by_140_fields() {
    let (points, settings, carriers) = benchmark_case();
    assert_eq!(points.len(), 140);
    let start = std::time::Instant::now();
    let result = mobility_spectrum(&points, &settings, &Unmonitored).unwrap();
    let elapsed = start.elapsed();
    println!(
        "spectrum.mobility, 200 mobilities per sign x 140 fields: {:.3} s ({} regularization trials)\n{}",
        elapsed.as_secs_f64(),
        result.regularization.trials.len(),
        describe(&result)
    );
    assert_eq!(result.mobility_m2_per_vs.len(), 200);
    assert_recovered(&result, &carriers, 0.1, 0.1, 0.03);
}
