//! Tests of the `two_band` module: published check values, recovery from forward-generated data, and bad input.

use super::*;
use mobilis_numerics::fit::{LeastSquares, LmOptions};
use mobilis_physics::forward::tensor::{symmetric_fields, synthetic_sweep, SweepImperfections, SweepNoise};
use mobilis_physics::sweep::{conductivity_points, TensorPoint};

const CM3: f64 = 1e6;
const CM2_PER_VS: f64 = 1e-4;

fn close(actual: f64, expected: f64, relative: f64) -> bool {
    ((actual - expected) / expected).abs() <= relative
}

/// A reference pair (an invented test input): electrons 1e16 cm^-3
/// at 1000 cm^2/Vs and holes 1e17 cm^-3 at 100 cm^2/Vs, in a 1 um layer.
fn check_pair() -> [Carrier; 2] {
    let t = 1e-6;
    [
        Carrier::from_volume_density(CarrierKind::Electron, 1e16 * CM3, 1000.0 * CM2_PER_VS, t).unwrap(),
        Carrier::from_volume_density(CarrierKind::Hole, 1e17 * CM3, 100.0 * CM2_PER_VS, t).unwrap(),
    ]
}

/// An electron channel that the sweep resolves (mu B_max = 9) and holes near the edge of
/// the range (mu B_max = 0.9).
fn electron_hole() -> [Carrier; 2] {
    [Carrier::electron(2e15, 1.0), Carrier::hole(1e16, 0.1)]
}

fn noise() -> SweepNoise {
    SweepNoise {
        absolute_ohm: 0.05,
        relative: 2e-3,
    }
}

fn noisy_sweep(carriers: &[Carrier], seed: u64) -> Vec<SweepPoint> {
    let imperfections = SweepImperfections {
        hall_misalignment: 0.02,
        longitudinal_hall_pickup: 0.005,
    };
    synthetic_sweep(
        carriers,
        &symmetric_fields(9.0, 90).unwrap(),
        &noise(),
        &imperfections,
        &mut Rng::seeded(seed),
    )
    .unwrap()
}

/// (fitted - true) / standard uncertainty for density and mobility of each carrier.
fn pulls(fit: &TwoBandFit, truth: &[Carrier; 2]) -> Vec<f64> {
    fit.carriers
        .iter()
        .zip(truth)
        .flat_map(|(c, t)| {
            [
                (c.sheet_density_m2 - t.sheet_density_m2) / c.sheet_density_unc_m2.unwrap(),
                (c.mobility_m2_per_vs - t.mobility_m2_per_vs) / c.mobility_unc_m2_per_vs.unwrap(),
            ]
        })
        .collect()
}

// Computed from the Beck and Anderson sums (J. Appl. Phys. 62, 541, 1987) with CODATA 2018 e,
// evaluated independently in double precision and kept to 8 digits: rho_0 = 3.1207545e-3 ohm m; at 1 T rho_xx =
// 3.1301757e-3, rho_xy = -1.4001000e-4; at 10 T 3.9058092e-3 and -1.0510649e-3 ohm m. Sheet
// values times the 1 um thickness are the volume ones.
#[test]
fn two_band_model_matches_the_check_values() {
    let t = 1e-6;
    let carriers = check_pair();
    let zero = two_band_resistivity(&carriers, 0.0);
    assert!(close(zero.rho_xx_ohm_sq * t, 3.120_754_5e-3, 1e-6), "{zero:?}");
    assert_eq!(zero.rho_xy_ohm, 0.0);
    for (field, rho_xx, rho_xy) in [
        (1.0, 3.130_175_7e-3, -1.400_100_0e-4),
        (10.0, 3.905_809_2e-3, -1.051_064_9e-3),
    ] {
        let rho = two_band_resistivity(&carriers, field);
        assert!(close(rho.rho_xx_ohm_sq * t, rho_xx, 1e-6), "{field}: {rho:?}");
        assert!(close(rho.rho_xy_ohm * t, rho_xy, 1e-6), "{field}: {rho:?}");
        // The contract's sign: odd in B, negative here because the electrons dominate.
        let reversed = two_band_resistivity(&carriers, -field);
        assert_eq!(reversed.rho_xy_ohm, -rho.rho_xy_ohm);
        assert_eq!(reversed.rho_xx_ohm_sq, rho.rho_xx_ohm_sq);
    }
}

// The closed two-band expressions (the two-band model, Ashcroft and Mermin, Solid State
// Physics, 1976, ch. 12, problem 4; from memory) against the model the fit uses, for a pair
// far from the reference pair (holes the majority, mobilities a decade apart the other way).
#[test]
fn two_band_model_matches_the_closed_two_band_form() {
    let (n, mu_n, p, mu_p) = (3e15, 0.05, 2e16, 0.4);
    let carriers = [Carrier::electron(n, mu_n), Carrier::hole(p, mu_p)];
    let e = ELEMENTARY_CHARGE_C;
    for field in [-20.0, -3.0, 0.0, 0.5, 2.5, 14.0] {
        let d = (n * mu_n + p * mu_p).powi(2) + (p - n).powi(2) * mu_n.powi(2) * mu_p.powi(2) * field * field;
        let rho_xx =
            ((n * mu_n + p * mu_p) + (n * mu_n * mu_p * mu_p + p * mu_p * mu_n * mu_n) * field * field) / (e * d);
        let rho_xy = field
            * ((p * mu_p * mu_p - n * mu_n * mu_n) + (p - n) * mu_n * mu_n * mu_p * mu_p * field * field)
            / (e * d);
        let rho = two_band_resistivity(&carriers, field);
        assert!(close(rho.rho_xx_ohm_sq, rho_xx, 1e-12), "{field}");
        assert!((rho.rho_xy_ohm - rho_xy).abs() <= 1e-12 * rho_xx, "{field}");
    }
}

// Noise-free data of the reference pair to 10 T: the fit must return the carriers that made
// them (computed from the Beck and Anderson sums, J. Appl. Phys. 62, 541, 1987). The holes reach only
// mu B = 0.1, so they rest on the small curvature they add, which noise-free data keep.
#[test]
fn two_band_recovers_the_check_value_pair_from_exact_data() {
    let carriers = check_pair();
    let fields = symmetric_fields(10.0, 50).unwrap();
    let points = synthetic_sweep(
        &carriers,
        &fields,
        &SweepNoise::NONE,
        &SweepImperfections::default(),
        &mut Rng::seeded(1),
    )
    .unwrap();
    let result = fit_two_band_sweep(&points, &SymmetrizeSettings::default(), &TwoBandSettings::default()).unwrap();
    let fit = &result.fit;
    assert!(!fit.weighted);
    for (fitted, truth) in fit.carriers.iter().zip(&carriers) {
        assert_eq!(fitted.kind, truth.kind);
        assert!(
            close(fitted.sheet_density_m2, truth.sheet_density_m2, 1e-6),
            "{fitted:?}"
        );
        assert!(
            close(fitted.mobility_m2_per_vs, truth.mobility_m2_per_vs, 1e-6),
            "{fitted:?}"
        );
    }
    // The derived numbers of the fitted model are the reference values too: rho_0 and
    // R_H(B -> 0) = -1.404340e-4, R_H(B -> inf) = +6.935010e-5 m^3/C (sheet values times t).
    let t = 1e-6;
    assert!(close(fit.zero_field_rho_ohm_sq * t, 3.120_754_5e-3, 1e-6));
    assert!(close(fit.low_field_hall_coefficient_m2_per_c * t, -1.404_340e-4, 1e-6));
    assert!(close(
        fit.high_field_hall_coefficient_m2_per_c.unwrap() * t,
        6.935_010e-5,
        1e-6
    ));
    let model = fit.model_curve(&[0.0, 10.0]);
    assert_eq!(model[0].mr, 0.0);
    // MR(10 T) = 3.9058092 / 3.1207545 - 1, computed from the reference values.
    assert!((model[1].mr - 0.251_559_26).abs() < 1e-7);
}

// Recovery from forward-generated sweeps with noise, contact misalignment and Hall pickup,
// symmetrized first: over 16 independent sweeps the deviations from the truth in units of
// the reported uncertainty must have an rms near 1 (0.7 to 1.35 allows for 64 draws, about
// 0.09 of sampling scatter, and for the first-order errors of the log parameters), and the
// chi-square must be that of the noise.
#[test]
fn two_band_recovers_carriers_from_noisy_sweeps_with_honest_uncertainties() {
    let truth = electron_hole();
    let mut all = Vec::new();
    for seed in 0..16 {
        let result = fit_two_band_sweep(
            &noisy_sweep(&truth, seed),
            &SymmetrizeSettings::default(),
            &TwoBandSettings::default(),
        )
        .unwrap();
        let fit = &result.fit;
        assert!(fit.weighted);
        let nu = fit.degrees_of_freedom as f64;
        assert!(
            (fit.reduced_chi_square - 1.0).abs() < 5.0 * (2.0 / nu).sqrt(),
            "seed {seed}: {}",
            fit.reduced_chi_square
        );
        let p = pulls(fit, &truth);
        assert!(p.iter().all(|z| z.abs() < 4.5), "seed {seed}: {p:?} {:?}", fit.carriers);
        for c in &fit.carriers {
            assert!(c.sheet_density_unc_m2.unwrap() / c.sheet_density_m2 < 0.1, "{c:?}");
        }
        assert!(fit.warnings.is_empty(), "seed {seed}: {:?}", fit.warnings);
        assert!(fit.starts_at_minimum > 1);
        all.extend(p);
    }
    let rms = (all.iter().map(|z| z * z).sum::<f64>() / all.len() as f64).sqrt();
    assert!((0.7..1.35).contains(&rms), "rms pull {rms}");
}

/// Whitened residuals of sigma_xx and sigma_xy: the conductivity-space least squares that
/// `spectrum.multi_carrier_fit` solves, written out here with the same solver.
fn conductivity_residuals(points: &[TensorPoint], kinds: &[CarrierKind; 2], p: &[f64], out: &mut [f64]) {
    let carriers = [0, 1].map(|i| Carrier {
        kind: kinds[i],
        sheet_density_m2: p[2 * i].exp(),
        mobility_m2_per_vs: p[2 * i + 1].exp(),
    });
    let mut offset = 0;
    for point in points {
        let model = sum_conductivity(&carriers, point.field_t);
        let u = point.uncertainty.unwrap();
        let r1 = (model.sigma_xx_s - point.sigma_xx_s) / u.sigma_xx_s;
        out[offset] = r1;
        offset += 1;
        if point.field_t != 0.0 {
            let c = u.correlation;
            out[offset] =
                (model.sigma_xy_s - point.sigma_xy_s - c * u.sigma_xy_s * r1) / (u.sigma_xy_s * (1.0 - c * c).sqrt());
            offset += 1;
        }
    }
}

// Agreement with the conductivity-space fit of spectrum.multi_carrier_fit for two carriers:
// the same symmetrized sweep converted to sigma with its propagated covariance
// (mobilis_physics::sweep::conductivity_points) and fitted by the same solver in sigma. To first
// order the two are the same weighted least squares (the tensor inversion is a smooth map
// whose Jacobian carries the covariance across), so their parameters must agree to a small
// fraction of an uncertainty, and both must lie near the truth.
#[test]
fn two_band_agrees_with_the_conductivity_space_fit() {
    let truth = electron_hole();
    let kinds = [CarrierKind::Electron, CarrierKind::Hole];
    for seed in [3, 4, 5] {
        let result = fit_two_band_sweep(
            &noisy_sweep(&truth, seed),
            &SymmetrizeSettings::default(),
            &TwoBandSettings::default(),
        )
        .unwrap();
        let tensor = conductivity_points(&result.symmetrized);
        let residual_count = tensor.iter().map(|p| if p.field_t == 0.0 { 1 } else { 2 }).sum();
        let problem = LeastSquares::new(residual_count, |p: &[f64], r: &mut [f64]| {
            conductivity_residuals(&tensor, &kinds, p, r)
        });
        let options = LmOptions {
            residuals_are_weighted: true,
            parameter_scales: Some(vec![1.0; 4]),
            ..LmOptions::default()
        };
        let truth_start: Vec<f64> = truth
            .iter()
            .flat_map(|c| [c.sheet_density_m2.ln(), c.mobility_m2_per_vs.ln()])
            .collect();
        let sigma_fit = problem.minimize(&truth_start, &options).unwrap();
        assert!(sigma_fit.converged);
        // Both fits widen their covariance by the Birge ratio of their own chi-square.
        let sigma_widening =
            mobilis_numerics::fit::FitQuality::assess(sigma_fit.chi_square, sigma_fit.degrees_of_freedom).birge_ratio;
        let rho_fit = &result.fit;
        for (i, carrier) in rho_fit.carriers.iter().enumerate() {
            let values = [carrier.sheet_density_m2.ln(), carrier.mobility_m2_per_vs.ln()];
            let errors = [
                carrier.sheet_density_unc_m2.unwrap() / carrier.sheet_density_m2,
                carrier.mobility_unc_m2_per_vs.unwrap() / carrier.mobility_m2_per_vs,
            ];
            for q in 0..2 {
                let sigma_value = sigma_fit.parameters[2 * i + q];
                let sigma_error = sigma_fit.standard_errors[2 * i + q] * sigma_widening;
                assert!(
                    (values[q] - sigma_value).abs() < 0.2 * errors[q],
                    "seed {seed}, carrier {i}, parameter {q}: {} vs {sigma_value} (+- {})",
                    values[q],
                    errors[q]
                );
                assert!(
                    (errors[q] / sigma_error - 1.0).abs() < 0.05,
                    "{} vs {sigma_error}",
                    errors[q]
                );
                assert!((values[q] - truth_start[2 * i + q]).abs() < 4.0 * errors[q]);
            }
        }
        // Same minimum in chi-square too: chi-square differs by the second-order terms only.
        assert!((rho_fit.chi_square - sigma_fit.chi_square).abs() < 0.05 * rho_fit.chi_square);
    }
}

// Any pair of kinds: a high-mobility 2D electron channel over a low-mobility electron layer.
#[test]
fn two_band_fits_two_carriers_of_one_kind() {
    let truth = [Carrier::electron(3e16, 0.15), Carrier::electron(5e15, 1.5)];
    let settings = TwoBandSettings {
        kinds: [CarrierKind::Electron, CarrierKind::Electron],
        ..Default::default()
    };
    let result = fit_two_band_sweep(&noisy_sweep(&truth, 7), &SymmetrizeSettings::default(), &settings).unwrap();
    let fit = &result.fit;
    // Ordered by mobility: the parallel layer first.
    assert!(fit.carriers[0].mobility_m2_per_vs < fit.carriers[1].mobility_m2_per_vs);
    let p = pulls(fit, &truth);
    assert!(p.iter().all(|z| z.abs() < 4.0), "{p:?} {:?}", fit.carriers);
    // Both bands drive rho_xy negative.
    assert!(fit.curve.iter().all(|c| c.rho_xy_fit_ohm <= 0.0));
    // The swapped labels of the grid starts count as the same minimum.
    assert!(fit.starts_at_minimum > 1, "{}", fit.starts_at_minimum);
}

// The analytic Jacobian against central differences of the residuals.
#[test]
fn two_band_analytic_jacobian_matches_finite_differences() {
    let points = noisy_sweep(&electron_hole(), 2);
    let data = Data::new(&points).unwrap();
    let kinds = [CarrierKind::Electron, CarrierKind::Hole];
    let p = [(3e15f64).ln(), (0.7f64).ln(), (8e15f64).ln(), (0.2f64).ln()];
    let model = CarrierModel {
        data: &data,
        kinds: &kinds,
        space: TensorSpace::Resistivity,
    };
    let mut analytic = Matrix::zeros(data.residual_count, 4);
    model.jacobian(&p, &mut analytic);
    let h = 1e-6;
    let (mut plus, mut minus) = (vec![0.0; data.residual_count], vec![0.0; data.residual_count]);
    for j in 0..4 {
        let mut q = p;
        q[j] += h;
        model.residuals(&q, &mut plus);
        q[j] -= 2.0 * h;
        model.residuals(&q, &mut minus);
        let scale = (0..data.residual_count)
            .map(|r| analytic[(r, j)].abs())
            .fold(0.0, f64::max);
        for r in 0..data.residual_count {
            let numeric = (plus[r] - minus[r]) / (2.0 * h);
            assert!(
                (numeric - analytic[(r, j)]).abs() < 1e-6 * scale,
                "row {r}, parameter {j}: {numeric} vs {}",
                analytic[(r, j)]
            );
        }
    }
}

#[test]
fn two_band_refuses_bad_input_with_clear_errors() {
    let carriers = electron_hole();
    let defaults = TwoBandSettings::default();
    let sweep = SymmetrizeSettings::default();
    let positive: Vec<f64> = (0..=20).map(|k| 0.4 * k as f64).collect();
    let points = synthetic_sweep(
        &carriers,
        &positive,
        &SweepNoise::NONE,
        &SweepImperfections::default(),
        &mut Rng::seeded(1),
    )
    .unwrap();
    // Readings at zero field only.
    let zeros: Vec<SweepPoint> = (0..3).map(|_| SweepPoint::new(0.0, 100.0, 0.0)).collect();
    let error = fit_two_band_sweep(&zeros, &sweep, &defaults).unwrap_err();
    assert!(
        matches!(error, TwoBandError::Sweep(SweepError::ZeroFieldOnly { .. })),
        "{error:?}"
    );
    assert!(error.to_string().contains("zero_field_tolerance_T"), "{error}");
    // Field points only at zero field.
    let zero: Vec<SweepPoint> = (0..5).map(|_| SweepPoint::new(0.0, 100.0, 0.0)).collect();
    let error = fit_two_band(&zero, &defaults).unwrap_err();
    assert_eq!(error, TwoBandError::Data(TensorDataError::NoField { points: 5 }));
    assert!(error.to_string().contains("give a field sweep"), "{error}");
    // Too few points for four parameters.
    let two = [SweepPoint::new(0.0, 100.0, 0.0), SweepPoint::new(1.0, 101.0, -3.0)];
    let error = fit_two_band(&two, &defaults).unwrap_err();
    assert!(
        matches!(error, TwoBandError::TooFewPoints { residuals: 3, .. }),
        "{error:?}"
    );
    assert!(error.to_string().contains("give more field points"));
    // Bad values.
    let mut bad = points.clone();
    bad[4].rho_xy_ohm = f64::INFINITY;
    assert!(matches!(
        fit_two_band(&bad, &defaults),
        Err(TwoBandError::Data(TensorDataError::NonFinite {
            index: 4,
            column: "rho_xy_ohm",
            ..
        }))
    ));
    bad[4].rho_xy_ohm = 1.0;
    bad[2].rho_xx_ohm_sq = -5.0;
    let error = fit_two_band(&bad, &defaults).unwrap_err();
    assert!(matches!(
        error,
        TwoBandError::Data(TensorDataError::NonPositiveXx { index: 2, .. })
    ));
    assert!(!error.to_string().ends_with('.'));
    // Settings.
    let settings = TwoBandSettings {
        mobility_bounds_m2_per_vs: (1.0, 0.1),
        ..Default::default()
    };
    assert!(matches!(
        fit_two_band(&points, &settings),
        Err(TwoBandError::InvalidSetting {
            name: "mobility_bounds_m2_per_vs",
            ..
        })
    ));
    let settings = TwoBandSettings {
        guess: Some([Carrier::hole(1e15, 1.0), Carrier::hole(1e16, 0.1)]),
        ..Default::default()
    };
    let error = fit_two_band(&points, &settings).unwrap_err();
    assert_eq!(
        error,
        TwoBandError::InvalidGuess {
            index: 0,
            what: "its kind differs from the one in `kinds`".into()
        }
    );
    // A guess breaking the forward model's rule for a carrier is named with that rule.
    let settings = TwoBandSettings {
        guess: Some([Carrier::electron(1e15, f64::NAN), Carrier::hole(1e16, 0.1)]),
        ..Default::default()
    };
    let error = fit_two_band(&points, &settings).unwrap_err();
    assert!(
        matches!(error, TwoBandError::InvalidGuess { index: 0, .. }),
        "{error:?}"
    );
    assert!(error.to_string().contains("mobility_m2_per_vs = NaN"), "{error}");
}

// A guess is one more start and leaves the answer unchanged when the data decide it.
#[test]
fn two_band_guess_is_one_more_start() {
    let truth = electron_hole();
    let points = noisy_sweep(&truth, 9);
    let plain = fit_two_band_sweep(&points, &SymmetrizeSettings::default(), &TwoBandSettings::default()).unwrap();
    let guessed = TwoBandSettings {
        guess: Some([Carrier::electron(1e15, 2.0), Carrier::hole(3e16, 0.05)]),
        ..Default::default()
    };
    let with_guess = fit_two_band_sweep(&points, &SymmetrizeSettings::default(), &guessed).unwrap();
    assert_eq!(with_guess.fit.starts, plain.fit.starts + 1);
    for (a, b) in plain.fit.carriers.iter().zip(&with_guess.fit.carriers) {
        assert!((a.mobility_m2_per_vs / b.mobility_m2_per_vs - 1.0).abs() < 1e-6);
        assert!((a.sheet_density_m2 / b.sheet_density_m2 - 1.0).abs() < 1e-6);
    }
}

// One branch with rho_xy (positive or negative fields only, no misalignment): the fit
// recovers the pair as from both branches, rho_xx being even and rho_xy odd in B (Onsager
// 1931), and says that the misalignment could not be removed.
#[test]
fn two_band_fits_one_field_sign_with_a_flag() {
    let carriers = electron_hole();
    for sign in [1.0, -1.0] {
        let fields: Vec<f64> = (0..=30).map(|k| sign * 0.3 * k as f64).collect();
        let points = synthetic_sweep(
            &carriers,
            &fields,
            &SweepNoise::NONE,
            &SweepImperfections::default(),
            &mut Rng::seeded(1),
        )
        .unwrap();
        let result = fit_two_band_sweep(&points, &SymmetrizeSettings::default(), &TwoBandSettings::default()).unwrap();
        assert!(result.symmetrized.single_field_sign);
        assert!(
            result
                .fit
                .warnings
                .iter()
                .any(|w| w.starts_with("single_field_sign") && w.contains("misalignment")),
            "{:?}",
            result.fit.warnings
        );
        for (fitted, truth) in result.fit.carriers.iter().zip(&carriers) {
            assert_eq!(fitted.kind, truth.kind);
            assert!(
                (fitted.sheet_density_m2 / truth.sheet_density_m2 - 1.0).abs() < 1e-4,
                "{fitted:?}"
            );
            assert!(
                (fitted.mobility_m2_per_vs / truth.mobility_m2_per_vs - 1.0).abs() < 1e-4,
                "{fitted:?}"
            );
        }
    }
}

/// `count` points at positive fields with 0.5 ohm of noise on rho_xx and rho_xy, each stating
/// `stated_ohm` as its standard uncertainty.
fn sweep_stating(stated_ohm: f64, seed: u64) -> Vec<SweepPoint> {
    let fields: Vec<f64> = (1..=60).map(|k| 0.15 * k as f64).collect();
    let noise = SweepNoise {
        absolute_ohm: 0.5,
        relative: 0.0,
    };
    synthetic_sweep(
        &electron_hole(),
        &fields,
        &noise,
        &SweepImperfections::default(),
        &mut Rng::seeded(seed),
    )
    .unwrap()
    .into_iter()
    .map(|p| p.with_uncertainty(ResistivityUncertainty::independent(stated_ohm, stated_ohm)))
    .collect()
}

// Weighted by stated uncertainties four times smaller than the noise, chi^2/nu comes out near
// 16: the uncertainties are widened by the Birge ratio (Birge, Phys. Rev. 40, 207, 1932; the
// Particle Data Group's practice) to what honest ones give, the p-value says the fit is poor,
// and a warning names the worst fields and the columns that weight the points. Honest
// uncertainties leave the covariance as it stands.
#[test]
fn understated_uncertainties_are_widened_by_the_birge_ratio() {
    let honest = fit_two_band(&sweep_stating(0.5, 3), &TwoBandSettings::default()).unwrap();
    let understated = fit_two_band(&sweep_stating(0.125, 3), &TwoBandSettings::default()).unwrap();
    let birge = understated.birge_ratio.unwrap();
    assert!((3.0..5.5).contains(&birge), "Birge ratio {birge}");
    assert!(understated.chi_square_p_value.unwrap() < 1e-3);
    let honest_birge = honest.birge_ratio.unwrap();
    assert!(honest_birge < 1.4, "honest Birge ratio {honest_birge}");
    assert!(honest.chi_square_p_value.unwrap() > 1e-3);
    for (wide, fair) in understated.carriers.iter().zip(&honest.carriers) {
        let ratio = wide.mobility_unc_m2_per_vs.unwrap() / fair.mobility_unc_m2_per_vs.unwrap();
        assert!(
            (ratio / (birge / 4.0 / honest_birge) - 1.0).abs() < 0.3,
            "widened to {ratio} of the honest"
        );
    }
    assert!(
        understated
            .warnings
            .iter()
            .any(|w| w.contains("Birge ratio") && w.contains("B = ") && w.contains("rho_xx_ohm_sq_unc")),
        "{:?}",
        understated.warnings
    );
}
