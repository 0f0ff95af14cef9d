//! Tests of the `multi_carrier` module: published values, recovery from forward-generated data, coverage of the uncertainties, and bad input.

use super::*;
use mobilis_physics::forward::tensor::{
    resistivity_tensor, symmetric_fields, synthetic_sweep, SweepImperfections, SweepNoise,
};
use mobilis_physics::sweep::{conductivity_point, SweepError};
use mobilis_physics::tensor_data::TensorDataError;

mod coverage;
mod recovery;
mod support;

use support::{given, noisy_sweep};

fn close(actual: f64, expected: f64, relative: f64) -> bool {
    ((actual - expected) / expected).abs() <= relative
}

/// Exact conductivity points of `carriers` at `fields`, without uncertainties.
fn exact_points(carriers: &[Carrier], fields: &[f64]) -> Vec<TensorPoint> {
    fields
        .iter()
        .map(|&b| {
            let rho = resistivity_tensor(carriers, b).unwrap();
            conductivity_point(&SweepPoint::new(b, rho.rho_xx_ohm_sq, rho.rho_xy_ohm))
        })
        .collect()
}

use CarrierKind::{Electron, Hole};

// Computed from the Drude sums of Beck and Anderson (J. Appl. Phys. 62, 541, 1987) with the
// CODATA 2018 elementary charge (sigma_0 = e (n mu_n + p mu_p) = 320.4 S/m, so rho_0 =
// 1 / sigma_0):
// electrons 1e16 cm^-3 at 1000 cm^2/Vs plus holes 1e17 cm^-3 at 100 cm^2/Vs give rho_0 =
// 3.1207545e-3 ohm m, and at 1 T rho_xx 3.1301757e-3, rho_xy -1.4001000e-4, at 10 T
// 3.9058092e-3, -1.0510649e-3. Fitting those five numbers (as sheet values of a 1 um layer)
// must return the two carriers: 1e16 m^-2 at 0.1 m^2/(V s) and 1e17 m^-2 at 0.01.
#[test]
fn multi_carrier_fit_of_a_computed_two_carrier_tensor_returns_its_carriers() {
    let t = 1e-6;
    let sheet = |rho: f64| rho / t;
    let sweep = [
        (0.0, 3.120_754_5e-3, 0.0),
        (1.0, 3.130_175_7e-3, -1.400_100_0e-4),
        (10.0, 3.905_809_2e-3, -1.051_064_9e-3),
    ];
    let points: Vec<TensorPoint> = sweep
        .iter()
        .map(|&(b, xx, xy)| conductivity_point(&SweepPoint::new(b, sheet(xx), sheet(xy))))
        .collect();
    let fit = fit_carriers(&points, &given(&[Electron, Hole])).unwrap();
    assert_eq!(fit.residual_count, 5);
    let (electrons, holes) = (&fit.carriers[0], &fit.carriers[1]);
    assert_eq!((electrons.kind, holes.kind), (Electron, Hole));
    // The values carry 8 digits, so the carriers come back to about 1e-6.
    assert!(close(electrons.sheet_density_m2, 1e16, 2e-5), "{electrons:?}");
    assert!(close(electrons.mobility_m2_per_vs, 0.1, 2e-5), "{electrons:?}");
    assert!(close(holes.sheet_density_m2, 1e17, 2e-5), "{holes:?}");
    assert!(close(holes.mobility_m2_per_vs, 0.01, 2e-5), "{holes:?}");
    assert!(fit.reduced_chi_square < 1e-10, "{}", fit.reduced_chi_square);
}

// One carrier alone gives no magnetoresistance: rho_xx = 1 / (e n mu) at every field, the
// Drude result (N. W. Ashcroft and N. D. Mermin, Solid State Physics, 1976, ch. 1, from
// memory; it follows from the Beck and Anderson sums with one term): exact one-carrier data are fitted by one carrier, automatic selection stops there,
// and the fitted rho_xx is flat in field.
#[test]
fn multi_carrier_one_carrier_data_give_one_carrier_and_no_magnetoresistance() {
    let fields: Vec<f64> = (0..=20).map(|i| 0.45 * i as f64).collect();
    for truth in [Carrier::electron(4e15, 1.5), Carrier::hole(3e17, 0.02)] {
        let points = exact_points(&[truth], &fields);
        let fit = fit_carriers(&points, &MultiCarrierSettings::default()).unwrap();
        assert_eq!(fit.carriers.len(), 1, "{:?}", fit.candidates);
        let carrier = &fit.carriers[0];
        assert_eq!(carrier.kind, truth.kind);
        assert!(
            close(carrier.sheet_density_m2, truth.sheet_density_m2, 1e-9),
            "{carrier:?}"
        );
        assert!(
            close(carrier.mobility_m2_per_vs, truth.mobility_m2_per_vs, 1e-9),
            "{carrier:?}"
        );
        let rho_0 = fit.curve[0].rho_xx_fit_ohm_sq;
        for point in fit.model_curve(&[0.0, 1.0, 9.0, 30.0]) {
            assert!(close(point.rho_xx_ohm_sq, rho_0, 1e-12), "{point:?}");
        }
        // Two carriers were tried and did not improve the criterion.
        assert!(fit.candidates.iter().any(|c| c.kinds.len() == 2));
    }
}

// The analytic Jacobian against central differences of the residuals, with correlated
// uncertainties and a zero-field point (one residual) in the data.
#[test]
fn multi_carrier_analytic_jacobian_matches_finite_differences() {
    let carriers = [Carrier::electron(2e16, 0.7), Carrier::hole(6e16, 0.08)];
    let sweep = noisy_sweep(&carriers, 9.0, 12, 4);
    let symmetrized = symmetrize(&sweep, &SymmetrizeSettings::default()).unwrap();
    let points = conductivity_points(&symmetrized);
    assert!(points[0].field_t == 0.0 && points.iter().all(|p| p.uncertainty.is_some()));
    let data = Data::new(&points).unwrap();
    assert_eq!(data.residual_count, 2 * points.len() - 1);
    let kinds = [Electron, Hole, Electron];
    let parameters = [36.5, -0.4, 38.0, -2.3, 35.0, 1.1];
    let model = CarrierModel {
        data: &data,
        kinds: &kinds,
        space: TensorSpace::Conductivity,
    };
    let m = data.residual_count;
    let mut analytic = Matrix::zeros(m, 6);
    model.jacobian(&parameters, &mut analytic);
    let (mut plus, mut minus) = (vec![0.0; m], vec![0.0; m]);
    for j in 0..6 {
        let h = 1e-6;
        let mut shifted = parameters;
        shifted[j] += h;
        model.residuals(&shifted, &mut plus);
        shifted[j] -= 2.0 * h;
        model.residuals(&shifted, &mut minus);
        let scale = (0..m).map(|i| analytic[(i, j)].abs()).fold(0.0, f64::max);
        for i in 0..m {
            let numeric = (plus[i] - minus[i]) / (2.0 * h);
            assert!(
                (numeric - analytic[(i, j)]).abs() <= 1e-6 * scale,
                "d r_{i} / d p_{j}: {numeric} vs {}",
                analytic[(i, j)]
            );
        }
    }
}

// The information criteria: BIC = chi^2 + k ln m with known uncertainties; without them
// m ln(chi^2 / m) + k ln m with the noise scale counted (Schwarz 1978, from memory); AICc
// = AIC + 2k(k+1)/(m-k-1) (Hurvich and Tsai 1989, from memory).
#[test]
fn multi_carrier_information_criteria_follow_their_definitions() {
    let bic = InformationCriterion::Bic.score(50.0, 40, 2, true);
    assert!(close(bic, 50.0 + 4.0 * 40f64.ln(), 1e-15));
    let bic_unweighted = InformationCriterion::Bic.score(2e-4, 40, 2, false);
    assert!(close(
        bic_unweighted,
        40.0 * (2e-4f64 / 40.0).ln() + 5.0 * 40f64.ln(),
        1e-14
    ));
    let aicc = InformationCriterion::Aicc.score(50.0, 40, 2, true);
    assert!(close(aicc, 50.0 + 8.0 + 2.0 * 4.0 * 5.0 / 35.0, 1e-15));
    assert_eq!(InformationCriterion::Aicc.score(1.0, 5, 2, true), f64::INFINITY);
    // Noise-free data: the floor keeps the score finite.
    assert!(InformationCriterion::Bic.score(0.0, 40, 1, false).is_finite());
}

// Automatic selection finds how many carriers there are, of which kinds, on noisy sweeps.
#[test]
fn multi_carrier_automatic_selection_finds_the_number_and_kinds_of_carriers() {
    let cases: Vec<Vec<Carrier>> = vec![
        vec![Carrier::electron(8e15, 1.2)],
        vec![Carrier::hole(5e16, 0.3)],
        vec![Carrier::electron(1e16, 1.0), Carrier::electron(6e16, 0.1)],
        vec![Carrier::electron(2e16, 0.5), Carrier::hole(2e17, 0.05)],
        vec![
            Carrier::electron(1e16, 2.0),
            Carrier::electron(5e16, 0.2),
            Carrier::hole(3e17, 0.04),
        ],
    ];
    for (case, truth) in cases.iter().enumerate() {
        let sweep = noisy_sweep(truth, 9.0, 36, 100 + case as u64);
        let result = fit_sweep(&sweep, &SymmetrizeSettings::default(), &MultiCarrierSettings::default()).unwrap();
        let kinds: Vec<CarrierKind> = result.fit.carriers.iter().map(|c| c.kind).collect();
        let mut expected: Vec<CarrierKind> = truth.iter().map(|c| c.kind).collect();
        expected.sort();
        assert_eq!(kinds, expected, "case {case}: {:#?}", result.fit.candidates);
        recovery::assert_recovered(&result.fit, truth, &format!("automatic case {case}"));
    }
}

// The reported uncertainties are the actual scatter: over 30 noise realizations of a
// two-carrier sweep, the deviations of ln n and ln mu from the truth in units of their
// standard errors have a mean square near 1 (120 values: standard error of the mean square
// sqrt(2/120) = 0.13, bounds at about 3 of them).
#[test]
fn multi_carrier_uncertainties_match_the_scatter_of_repeated_fits() {
    let truth = [Carrier::electron(1e16, 1.0), Carrier::hole(5e16, 0.1)];
    let mut squares = Vec::new();
    for seed in 0..30 {
        let sweep = noisy_sweep(&truth, 9.0, 24, 1000 + seed);
        let fit = fit_sweep(&sweep, &SymmetrizeSettings::default(), &given(&[Electron, Hole]))
            .unwrap()
            .fit;
        for (fitted, true_carrier) in fit.carriers.iter().zip(&truth) {
            // The statistical parts: these sweeps have no calibration error.
            let se_n = fitted.sheet_density_budget.stat.unwrap() / fitted.sheet_density_m2;
            let se_mu = fitted.mobility_budget.stat.unwrap() / fitted.mobility_m2_per_vs;
            squares.push(((fitted.sheet_density_m2 / true_carrier.sheet_density_m2).ln() / se_n).powi(2));
            squares.push(((fitted.mobility_m2_per_vs / true_carrier.mobility_m2_per_vs).ln() / se_mu).powi(2));
        }
    }
    let mean_square = squares.iter().sum::<f64>() / squares.len() as f64;
    assert!(
        mean_square > 0.6 && mean_square < 1.4,
        "mean square of z: {mean_square}"
    );
}

// Without uncertainties the fit weights by |sigma(B)| and estimates the noise scale from
// the residuals: it still recovers the carriers within their reported uncertainties, and
// sqrt(chi^2 / nu) is the relative scatter of the data (noise 0.1 % of rho here).
#[test]
fn multi_carrier_fit_without_uncertainties_estimates_the_noise_scale() {
    let truth = [Carrier::electron(3e16, 0.6), Carrier::hole(1e17, 0.08)];
    let noise = SweepNoise {
        absolute_ohm: 0.0,
        relative: 1e-3,
    };
    let sweep = synthetic_sweep(
        &truth,
        &symmetric_fields(9.0, 36).unwrap(),
        &noise,
        &SweepImperfections::default(),
        &mut Rng::seeded(21),
    )
    .unwrap();
    assert!(sweep.iter().all(|p| p.uncertainty.is_none()));
    let result = fit_sweep(&sweep, &SymmetrizeSettings::default(), &given(&[Electron, Hole])).unwrap();
    assert!(!result.fit.weighted);
    recovery::assert_recovered(&result.fit, &truth, "unweighted");
    // Symmetrizing averages two readings, so the scatter is about 1e-3 / sqrt(2) of |rho|
    // per component; the components' noise is not isotropic, hence the wide bounds.
    let scatter = result.fit.reduced_chi_square.sqrt();
    assert!(scatter > 2e-4 && scatter < 1.5e-3, "{scatter}");
}

// A parallel layer of low mobility (mu B_max < 1) next to a second one: the pair cannot be
// told apart in the field range, and the fit says so.
#[test]
fn multi_carrier_warns_when_carriers_are_not_distinguishable_in_the_field_range() {
    let truth = [
        Carrier::electron(1e16, 1.0),
        Carrier::electron(2e17, 0.04),
        Carrier::hole(1e17, 0.08),
    ];
    let sweep = noisy_sweep(&truth, 9.0, 36, 8);
    let settings = MultiCarrierSettings {
        selection: CarrierSelection::Guess(truth.to_vec()),
        ..MultiCarrierSettings::default()
    };
    // Fitted or refused as indistinguishable: both are honest answers; a fit must warn.
    match fit_sweep(&sweep, &SymmetrizeSettings::default(), &settings) {
        Ok(result) => {
            let pair_warning = result
                .fit
                .warnings
                .iter()
                .any(|w| w.contains("both have mu B_max < 1") && w.contains("not distinguishable"));
            assert!(pair_warning, "{:#?}", result.fit.warnings);
        }
        Err(error) => assert!(matches!(error, MultiCarrierError::Indistinguishable { .. }), "{error}"),
    }
    // A well-separated pair raises no such warning.
    let clear = [Carrier::electron(1e16, 1.0), Carrier::hole(5e16, 0.3)];
    let result = fit_sweep(
        &noisy_sweep(&clear, 9.0, 36, 9),
        &SymmetrizeSettings::default(),
        &given(&[Electron, Hole]),
    )
    .unwrap();
    assert!(
        result.fit.warnings.iter().all(|w| !w.contains("mu B_max")),
        "{:#?}",
        result.fit.warnings
    );
}

// The curve holds the data and the fit at every input field, and the model curve is the
// forward model of the fitted carriers.
#[test]
fn multi_carrier_curve_is_ready_to_plot() {
    let truth = [Carrier::electron(2e16, 0.8), Carrier::hole(9e16, 0.06)];
    let result = fit_sweep(
        &noisy_sweep(&truth, 9.0, 36, 3),
        &SymmetrizeSettings::default(),
        &given(&[Hole, Electron]),
    )
    .unwrap();
    let fit = &result.fit;
    // Output order: electrons first.
    assert_eq!(fit.carriers[0].kind, Electron);
    assert_eq!(fit.curve.len(), result.symmetrized.points.len());
    for (point, sym) in fit.curve.iter().zip(&result.symmetrized.points) {
        assert_eq!(point.field_t, sym.field_t);
        assert!(close(point.rho_xx_ohm_sq, sym.rho_xx_ohm_sq, 1e-12));
        let model = resistivity_tensor(&fit.model_carriers(), point.field_t).unwrap();
        assert!(close(point.rho_xx_fit_ohm_sq, model.rho_xx_ohm_sq, 1e-12));
        assert_eq!(point.residual_xy.is_none(), point.field_t == 0.0);
        // The fit is within a few standard deviations of the data everywhere.
        assert!(point.residual_xx.abs() < 5.0, "{point:?}");
    }
    let chi_square: f64 = fit
        .curve
        .iter()
        .map(|p| p.residual_xx.powi(2) + p.residual_xy.unwrap_or(0.0).powi(2))
        .sum();
    assert!(close(chi_square, fit.chi_square, 1e-9));
    let smooth = fit.model_curve(&[0.0, 4.5, 9.0]);
    assert_eq!(smooth.len(), 3);
    assert!(close(
        smooth[2].rho_xx_ohm_sq,
        fit.curve.last().unwrap().rho_xx_fit_ohm_sq,
        1e-12
    ));
    // The correlation matrix has a unit diagonal.
    for i in 0..4 {
        assert!(close(fit.correlation[(i, i)], 1.0, 1e-12));
    }
}

#[test]
fn multi_carrier_refuses_bad_input_with_clear_errors() {
    let truth = [Carrier::electron(2e16, 0.8)];
    let sweep = noisy_sweep(&truth, 9.0, 8, 1);
    let settings = MultiCarrierSettings::default();
    let sym = SymmetrizeSettings::default();
    // Readings at zero field only (one field sign is accepted, flagged single_field_sign).
    let zero: Vec<SweepPoint> = sweep.iter().filter(|p| p.field_t == 0.0).copied().collect();
    let error = fit_sweep(&zero, &sym, &settings).unwrap_err();
    assert!(
        matches!(error, MultiCarrierError::Sweep(SweepError::ZeroFieldOnly { .. })),
        "{error:?}"
    );
    assert!(error.to_string().contains("zero_field_tolerance_T"), "{error}");
    // rho_xx <= 0.
    let mut negative_rho = sweep.clone();
    negative_rho[3].rho_xx_ohm_sq = -negative_rho[3].rho_xx_ohm_sq;
    assert!(matches!(
        fit_sweep(&negative_rho, &sym, &settings),
        Err(MultiCarrierError::Sweep(SweepError::NonPositiveRhoXx { index: 3, .. }))
    ));
    // NaN in a sweep and in conductivity points.
    let mut nan = sweep.clone();
    nan[5].rho_xy_ohm = f64::NAN;
    assert!(matches!(
        fit_sweep(&nan, &sym, &settings),
        Err(MultiCarrierError::Sweep(SweepError::NonFinite { index: 5, .. }))
    ));
    let good_points = exact_points(&truth, &[0.0, 1.0, 2.0, 3.0]);
    let mut nan_points = good_points.clone();
    nan_points[2].sigma_xy_s = f64::NAN;
    let error = fit_carriers(&nan_points, &settings).unwrap_err();
    assert!(
        matches!(
            error,
            MultiCarrierError::Data(TensorDataError::NonFinite { index: 2, .. })
        ),
        "{error:?}"
    );
    // The shared check's message names the point and the column in the conductivity's
    // own names, and what to give.
    assert_eq!(
        error.to_string(),
        "point 2: sigma_xy_S is NaN; give a finite number or drop the point"
    );
    // sigma_xx <= 0.
    let mut bad_sigma = good_points.clone();
    bad_sigma[1].sigma_xx_s = 0.0;
    assert!(matches!(
        fit_carriers(&bad_sigma, &settings),
        Err(MultiCarrierError::Data(TensorDataError::NonPositiveXx { index: 1, .. }))
    ));
    // Fewer points than parameters: 2 field points give 3 residuals; two carriers need 4
    // (5 without uncertainties), one carrier without uncertainties needs 3.
    let two_points = exact_points(&truth, &[0.0, 1.0]);
    let error = fit_carriers(&two_points, &given(&[Electron, Hole])).unwrap_err();
    assert!(
        matches!(
            error,
            MultiCarrierError::TooFewPoints {
                residuals: 3,
                carriers: 2,
                ..
            }
        ),
        "{error:?}"
    );
    assert!(
        error
            .to_string()
            .contains("give more field points or fit fewer carriers"),
        "{error}"
    );
    let one_point = exact_points(&truth, &[1.0]);
    assert!(matches!(
        fit_carriers(&one_point, &settings),
        Err(MultiCarrierError::TooFewPoints { carriers: 1, .. })
    ));
    // All points at zero field.
    let zero_field = exact_points(&truth, &[0.0, 0.0, 0.0]);
    assert!(matches!(
        fit_carriers(&zero_field, &settings),
        Err(MultiCarrierError::NoField { points: 3 })
    ));
    assert!(matches!(fit_carriers(&[], &settings), Err(MultiCarrierError::NoPoints)));
    // Mixed uncertainties.
    let mut mixed = good_points.clone();
    mixed[1].uncertainty = Some(TensorUncertainty {
        sigma_xx_s: 1e-6,
        sigma_xy_s: 1e-6,
        correlation: 0.0,
    });
    assert!(matches!(
        fit_carriers(&mixed, &settings),
        Err(MultiCarrierError::Data(TensorDataError::MixedUncertainties {
            with: 1,
            without: 3
        }))
    ));
    // Settings.
    assert!(matches!(
        fit_carriers(&good_points, &given(&[])),
        Err(MultiCarrierError::NoCarriers)
    ));
    let bad_bounds = MultiCarrierSettings {
        mobility_bounds_m2_per_vs: (1.0, 0.1),
        ..MultiCarrierSettings::default()
    };
    assert!(matches!(
        fit_carriers(&good_points, &bad_bounds),
        Err(MultiCarrierError::InvalidSetting { .. })
    ));
    let bad_guess = MultiCarrierSettings {
        selection: CarrierSelection::Guess(vec![Carrier::electron(f64::NAN, 1.0)]),
        ..MultiCarrierSettings::default()
    };
    assert!(matches!(
        fit_carriers(&good_points, &bad_guess),
        Err(MultiCarrierError::InvalidGuess { index: 0, .. })
    ));
    // No message ends with a period.
    for error in [
        MultiCarrierError::NoPoints,
        MultiCarrierError::NoField { points: 2 },
        MultiCarrierError::Indistinguishable {
            kinds: vec![Electron, Electron],
            carriers: vec![0, 1],
        },
    ] {
        assert!(!error.to_string().ends_with('.'), "{error}");
    }
}

/// Records progress and cancels after `cancel_after` reports.
struct Recorder {
    fractions: std::cell::RefCell<Vec<f64>>,
    cancel_after: usize,
}

impl Monitor for Recorder {
    fn progress(&self, fraction: f64, _message: &str) {
        self.fractions.borrow_mut().push(fraction);
    }
    fn is_cancelled(&self) -> bool {
        self.fractions.borrow().len() >= self.cancel_after
    }
}

#[test]
fn automatic_selection_reports_each_candidate_list_and_stops_when_cancelled() {
    let fields: Vec<f64> = (0..=20).map(|i| 0.45 * i as f64).collect();
    let points = exact_points(&[Carrier::electron(4e15, 1.5), Carrier::hole(3e17, 0.02)], &fields);
    let watching = Recorder {
        fractions: Default::default(),
        cancel_after: usize::MAX,
    };
    fit_carriers_monitored(&points, &MultiCarrierSettings::default(), &watching).unwrap();
    let fractions = watching.fractions.into_inner();
    assert!(fractions.len() >= 2, "{fractions:?}");
    assert!(fractions.windows(2).all(|w| w[0] < w[1]), "{fractions:?}");
    assert!(fractions.iter().all(|f| (0.0..1.0).contains(f)), "{fractions:?}");

    let impatient = Recorder {
        fractions: Default::default(),
        cancel_after: 1,
    };
    let error = fit_carriers_monitored(&points, &MultiCarrierSettings::default(), &impatient).unwrap_err();
    assert!(matches!(error, MultiCarrierError::Cancelled), "{error}");
}
