//! Tests of the `ratio` module: published check values, recovery from forward-generated data, and bad input.

use super::*;
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::tensor::{
    resistivity_tensor, symmetric_fields, synthetic_sweep, Carrier, CarrierKind, SweepImperfections, SweepNoise,
};
use mobilis_physics::sweep::ResistivityUncertainty;

const CM3: f64 = 1e6;
const CM2_PER_VS: f64 = 1e-4;

fn ideal_sweep(carriers: &[Carrier], fields: &[f64]) -> Vec<SweepPoint> {
    synthetic_sweep(
        carriers,
        fields,
        &SweepNoise::NONE,
        &SweepImperfections::default(),
        &mut Rng::seeded(1),
    )
    .unwrap()
}

fn point_at(curve: &MrCurve, field_t: f64) -> MrPoint {
    *curve
        .points
        .iter()
        .find(|p| (p.field_t - field_t).abs() < 1e-9)
        .unwrap_or_else(|| panic!("no grid point at {field_t} T"))
}

// Computed from the Drude sums of the two-band pair (Beck and Anderson, J. Appl. Phys. 62,
// 541, 1987, with CODATA 2018 e, evaluated independently in double precision): electrons 1e16 cm^-3 at
// 1000 cm^2/Vs and holes 1e17 cm^-3 at 100 cm^2/Vs give rho_0 = 3.1207545e-3 ohm m,
// rho_xx(1 T) = 3.1301757e-3 and rho_xx(10 T) = 3.9058092e-3 ohm m, so MR(1 T) =
// 3.1301757 / 3.1207545 - 1 = 3.0188853e-3 and MR(10 T) = 0.25155926. The eight digits of
// the reference values fix the MR to about 6e-8, hence the absolute tolerance 1e-7. The layer is
// 1 um thick (MR is a ratio, so the thickness cancels), and rho(0) itself must be the reference
// value.
#[test]
fn ratio_matches_the_two_band_check_values() {
    let thickness = 1e-6;
    let carriers = [
        Carrier::from_volume_density(CarrierKind::Electron, 1e16 * CM3, 1000.0 * CM2_PER_VS, thickness).unwrap(),
        Carrier::from_volume_density(CarrierKind::Hole, 1e17 * CM3, 100.0 * CM2_PER_VS, thickness).unwrap(),
    ];
    let fields = symmetric_fields(10.0, 10).unwrap();
    let curve = magnetoresistance(&ideal_sweep(&carriers, &fields), &RatioSettings::default()).unwrap();
    assert!((curve.zero_field.rho_ohm_sq * thickness / 3.120_754_5e-3 - 1.0).abs() < 1e-6);
    assert_eq!(curve.zero_field.method, "zero_field");
    assert_eq!(curve.zero_field.points, 1);
    assert!((point_at(&curve, 1.0).mr - 3.018_885_3e-3).abs() < 1e-7);
    assert!((point_at(&curve, 10.0).mr - 0.251_559_26).abs() < 1e-7);
    assert_eq!(point_at(&curve, 0.0).mr, 0.0);
    assert_eq!(curve.max_field_t, 10.0);
    assert_eq!(curve.mr_at_max_field, curve.max_mr);
    assert_eq!(curve.max_mr_field_t, 10.0);
    assert!(curve.points.iter().all(|p| p.mr_unc.is_none()));
    assert!(curve.warnings.is_empty(), "{:?}", curve.warnings);
}

// One Drude carrier alone gives no magnetoresistance (Ashcroft and Mermin, Solid State
// Physics, 1976, ch. 1; from memory); neither do two carriers of one kind and one mobility, which are one carrier of the
// summed density.
#[test]
fn ratio_single_carrier_gives_no_magnetoresistance() {
    let fields = symmetric_fields(30.0, 30).unwrap();
    for carriers in [
        vec![Carrier::electron(3e15, 2.5)],
        vec![Carrier::hole(7e17, 0.004)],
        vec![Carrier::hole(1e16, 0.3), Carrier::hole(4e16, 0.3)],
    ] {
        let curve = magnetoresistance(&ideal_sweep(&carriers, &fields), &RatioSettings::default()).unwrap();
        for point in &curve.points {
            assert!(point.mr.abs() < 1e-13, "{carriers:?}: {point:?}");
        }
    }
    // While an electron and a hole of the same mobility (a compensated semimetal) give a
    // large one: their Hall currents cancel instead of adding.
    let compensated = [Carrier::electron(1e16, 0.3), Carrier::hole(1e16, 0.3)];
    let curve = magnetoresistance(&ideal_sweep(&compensated, &fields), &RatioSettings::default()).unwrap();
    // Equal densities and mobilities: rho_xx(B) = rho_0 (1 + (mu B)^2), so MR = (mu B)^2
    // (from the two-band rho_xx, Ashcroft and Mermin 1976, ch. 12, problem 4, from memory,
    // with n = p, mu_n = mu_p).
    assert!(
        (point_at(&curve, 10.0).mr - 9.0).abs() < 1e-10,
        "{:?}",
        point_at(&curve, 10.0)
    );
}

// The reported u_MR against the scatter of MR over many noisy sweeps of one sample. The
// rho_xx(B) and rho(0) errors are independent here (no interpolation: both branches share
// the fields), so the first-order formula should match the Monte Carlo standard deviation
// to its sampling error (about 4 % for 400 sweeps; 15 % allowed).
#[test]
fn ratio_uncertainty_matches_the_scatter_over_repeated_sweeps() {
    let carriers = [Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)];
    let fields = symmetric_fields(6.0, 12).unwrap();
    let noise = SweepNoise {
        absolute_ohm: 0.2,
        relative: 1e-3,
    };
    let truth_0 = resistivity_tensor(&carriers, 0.0).unwrap().rho_xx_ohm_sq;
    let truth_5 = resistivity_tensor(&carriers, 5.0).unwrap().rho_xx_ohm_sq;
    let true_mr = truth_5 / truth_0 - 1.0;
    let mut values = Vec::new();
    let mut reported = Vec::new();
    for seed in 0..400 {
        let points = synthetic_sweep(
            &carriers,
            &fields,
            &noise,
            &SweepImperfections::default(),
            &mut Rng::seeded(seed),
        )
        .unwrap();
        let curve = magnetoresistance(&points, &RatioSettings::default()).unwrap();
        let at_5 = point_at(&curve, 5.0);
        values.push(at_5.mr);
        reported.push(at_5.mr_unc.unwrap());
        assert_eq!(point_at(&curve, 0.0).mr_unc, Some(0.0));
    }
    let k = values.len() as f64;
    let mean = values.iter().sum::<f64>() / k;
    let sd = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (k - 1.0)).sqrt();
    let typical = reported.iter().sum::<f64>() / k;
    assert!((sd / typical - 1.0).abs() < 0.15, "scatter {sd}, reported {typical}");
    // Unbiased to within 4 standard errors of the mean.
    assert!((mean - true_mr).abs() < 4.0 * sd / k.sqrt(), "{mean} vs {true_mr}");
}

#[test]
fn ratio_zero_field_scatter_gives_the_uncertainty_without_given_ones() {
    let mut points = ideal_sweep(&[Carrier::electron(2e15, 1.0)], &symmetric_fields(2.0, 4).unwrap());
    let rho = points[4].rho_xx_ohm_sq;
    // Three readings at zero field: rho - 1, rho, rho + 1 (mean rho, sd 1, error 1/sqrt 3).
    points[4].rho_xx_ohm_sq = rho - 1.0;
    points.push(SweepPoint::new(0.0, rho, 0.0));
    points.push(SweepPoint::new(-5e-5, rho + 1.0, 0.0));
    let curve = magnetoresistance(&points, &RatioSettings::default()).unwrap();
    assert_eq!(curve.zero_field.points, 3);
    assert!((curve.zero_field.rho_ohm_sq - rho).abs() < 1e-9 * rho);
    assert!((curve.zero_field.rho_unc_ohm_sq.unwrap() - 1.0 / 3f64.sqrt()).abs() < 1e-9);
}

// Extrapolation: up to 0.1 T (mu B <= 0.1) the B^4 term of this rho_xx, about -0.04 B^2 times
// the B^2 term, shifts the quadratic intercept by about 2e-7 of rho(0), so the intercept must
// return the true rho(0) (from the forward model) to 1e-6.
#[test]
fn ratio_extrapolates_rho0_from_the_lowest_fields() {
    let carriers = [Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)];
    let truth_0 = resistivity_tensor(&carriers, 0.0).unwrap().rho_xx_ohm_sq;
    let fields: Vec<f64> = (1..=50).flat_map(|k| [0.02 * k as f64, -0.02 * k as f64]).collect();
    let points = ideal_sweep(&carriers, &fields);
    let error = magnetoresistance(&points, &RatioSettings::default()).unwrap_err();
    assert!(matches!(error, RatioError::NoZeroField { .. }));
    let settings = RatioSettings {
        zero_field: ZeroFieldResistivity::Extrapolated {
            points: DEFAULT_EXTRAPOLATION_POINTS,
            max_field_t: None,
        },
        ..Default::default()
    };
    let curve = magnetoresistance(&points, &settings).unwrap();
    assert_eq!(curve.zero_field.method, "quadratic_extrapolation");
    assert_eq!(curve.zero_field.points, 5);
    assert!((curve.zero_field.max_field_t - 0.1).abs() < 1e-12);
    assert!(
        (curve.zero_field.rho_ohm_sq / truth_0 - 1.0).abs() < 1e-6,
        "{:?}",
        curve.zero_field
    );
    // The low-field coefficient of the two-band rho_xx: rho_0 MR'' with MR = sigma_1 sigma_2
    // (mu_1 - mu_2)^2 B^2 / (sigma_1 + sigma_2)^2 at low field (signed mobilities), which
    // follows from the two-band rho_xx (Ashcroft and Mermin 1976, ch. 12, problem 4; from
    // memory) to order B^2.
    let (s1, s2) = (carriers[0].sheet_conductance_s(), carriers[1].sheet_conductance_s());
    let expected_c = truth_0 * s1 * s2 * (-1.0f64 - 0.2).powi(2) / (s1 + s2).powi(2);
    let (c, _) = curve.zero_field.quadratic_coefficient.unwrap();
    assert!((c / expected_c - 1.0).abs() < 2e-3, "{c} vs {expected_c}");
    let low = curve.points[0];
    assert!((low.mr - (low.rho_xx_ohm_sq / truth_0 - 1.0)).abs() < 1e-6);

    // Two unweighted points cannot give an intercept with an uncertainty.
    let two = RatioSettings {
        zero_field: ZeroFieldResistivity::Extrapolated {
            points: 2,
            max_field_t: None,
        },
        ..Default::default()
    };
    assert!(matches!(
        magnetoresistance(&points, &two),
        Err(RatioError::TooFewForExtrapolation {
            available: 2,
            required: 3
        })
    ));
}

#[test]
fn ratio_extrapolation_warns_outside_the_quadratic_regime() {
    let carriers = [Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)];
    let fields: Vec<f64> = (1..=30).flat_map(|k| [0.2 * k as f64, -0.2 * k as f64]).collect();
    let noise = SweepNoise {
        absolute_ohm: 0.01,
        relative: 1e-5,
    };
    let points = synthetic_sweep(
        &carriers,
        &fields,
        &noise,
        &SweepImperfections::default(),
        &mut Rng::seeded(4),
    )
    .unwrap();
    let settings = RatioSettings {
        zero_field: ZeroFieldResistivity::Extrapolated {
            points: 0,
            max_field_t: Some(4.0),
        },
        ..Default::default()
    };
    let curve = magnetoresistance(&points, &settings).unwrap();
    assert_eq!(curve.zero_field.points, 20);
    assert!(
        curve.warnings.iter().any(|w| w.contains("not quadratic")),
        "{:?}",
        curve.warnings
    );
    // And inside it (mu B <= 0.2 for the faster carrier), no warning and a rho(0) within
    // its uncertainty of the truth.
    let settings = RatioSettings {
        zero_field: ZeroFieldResistivity::Extrapolated {
            points: 0,
            max_field_t: Some(0.2),
        },
        ..Default::default()
    };
    let fine: Vec<f64> = (1..=40).flat_map(|k| [0.005 * k as f64, -0.005 * k as f64]).collect();
    let points = synthetic_sweep(
        &carriers,
        &fine,
        &noise,
        &SweepImperfections::default(),
        &mut Rng::seeded(4),
    )
    .unwrap();
    let curve = magnetoresistance(&points, &settings).unwrap();
    let truth_0 = resistivity_tensor(&carriers, 0.0).unwrap().rho_xx_ohm_sq;
    let zero = &curve.zero_field;
    assert!(curve.warnings.is_empty(), "{:?}", curve.warnings);
    assert!(
        (zero.rho_ohm_sq - truth_0).abs() < 4.0 * zero.rho_unc_ohm_sq.unwrap(),
        "{zero:?} vs {truth_0}"
    );
}

#[test]
fn ratio_warns_about_negative_magnetoresistance() {
    // rho_xx falling as 100 - 5 B^2 ohm/sq, as weak localization makes it at low field.
    let points: Vec<SweepPoint> = (-10..=10)
        .map(|k| {
            let b = 0.2 * k as f64;
            SweepPoint::new(b, 100.0 - 5.0 * b * b, 3.0 * b)
                .with_uncertainty(ResistivityUncertainty::independent(0.01, 0.01))
        })
        .collect();
    let curve = magnetoresistance(&points, &RatioSettings::default()).unwrap();
    assert!((curve.mr_at_max_field + 0.2).abs() < 1e-12);
    assert!(
        curve.warnings.iter().any(|w| w.contains("negative")),
        "{:?}",
        curve.warnings
    );
}

#[test]
fn ratio_refuses_bad_input_with_clear_errors() {
    let carriers = [Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)];
    // Zero field only.
    let zero: Vec<f64> = vec![0.0, 0.0];
    let error = magnetoresistance(&ideal_sweep(&carriers, &zero), &RatioSettings::default()).unwrap_err();
    assert!(
        matches!(error, RatioError::Sweep(SweepError::ZeroFieldOnly { .. })),
        "{error:?}"
    );
    assert!(error.to_string().contains("zero_field_tolerance_T"), "{error}");
    // No zero-field point.
    let fields: Vec<f64> = (1..=10).flat_map(|k| [0.5 * k as f64, -0.5 * k as f64]).collect();
    let error = magnetoresistance(&ideal_sweep(&carriers, &fields), &RatioSettings::default()).unwrap_err();
    let message = error.to_string();
    assert!(message.contains("no point at zero field"), "{message}");
    assert!(message.contains("lowest |B| is 0.5 T"), "{message}");
    assert!(message.contains("extrapolate"), "{message}");
    assert!(!message.ends_with('.'));
    // Settings.
    let bad = RatioSettings {
        zero_field: ZeroFieldResistivity::Extrapolated {
            points: 5,
            max_field_t: Some(-1.0),
        },
        ..Default::default()
    };
    assert!(matches!(
        magnetoresistance(&ideal_sweep(&carriers, &fields), &bad),
        Err(RatioError::InvalidSetting {
            name: "max_field_t",
            ..
        })
    ));
    // A non-finite reading.
    let mut points = ideal_sweep(&carriers, &symmetric_fields(1.0, 2).unwrap());
    points[1].rho_xx_ohm_sq = f64::NAN;
    assert!(matches!(
        magnetoresistance(&points, &RatioSettings::default()),
        Err(RatioError::Sweep(SweepError::NonFinite { index: 1, .. }))
    ));
}

// A sweep at one field sign (positive, or negative only) gives the MR of the two-sign sweep
// exactly, rho_xx being even in B (Onsager 1931), with the flag and a warning that names it.
#[test]
fn ratio_accepts_one_field_sign_with_a_flag() {
    let carriers = [Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)];
    let both = magnetoresistance(
        &ideal_sweep(&carriers, &symmetric_fields(5.0, 10).unwrap()),
        &RatioSettings::default(),
    )
    .unwrap();
    assert!(!both.single_field_sign);
    assert!(both.warnings.iter().all(|w| !w.contains("single_field_sign")));
    for sign in [1.0, -1.0] {
        let fields: Vec<f64> = (0..=10).map(|k| sign * 0.5 * k as f64).collect();
        let curve = magnetoresistance(&ideal_sweep(&carriers, &fields), &RatioSettings::default()).unwrap();
        assert!(curve.single_field_sign);
        assert!(
            curve.warnings.iter().any(|w| w.starts_with("single_field_sign")),
            "{:?}",
            curve.warnings
        );
        assert_eq!(curve.points.len(), both.points.len());
        for (one, two) in curve.points.iter().zip(&both.points) {
            assert!((one.field_t - two.field_t).abs() < 1e-12);
            assert!((one.mr - two.mr).abs() < 1e-12, "{one:?} vs {two:?}");
        }
    }
}

// A ramp logged at 10 Hz: 40,000 readings from 0 to 14 T, one field sign, keep their field
// range, and the MR at the top agrees with the model's (Drude sums, as above) to the
// resolution of the averaging.
#[test]
fn ratio_dense_one_sign_ramp_keeps_its_field_range() {
    let carriers = [Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)];
    let fields: Vec<f64> = (0..40_000).map(|k| 14.0 * k as f64 / 39_999.0).collect();
    let curve = magnetoresistance(&ideal_sweep(&carriers, &fields), &RatioSettings::default()).unwrap();
    assert!(curve.single_field_sign);
    assert!(curve.max_field_t > 13.99, "{}", curve.max_field_t);
    let rho = |b: f64| {
        mobilis_physics::forward::tensor::resistivity_tensor(&carriers, b)
            .unwrap()
            .rho_xx_ohm_sq
    };
    let expected = rho(curve.max_field_t) / rho(0.0) - 1.0;
    assert!(
        (curve.mr_at_max_field - expected).abs() < 1e-6 * expected,
        "{} vs {expected}",
        curve.mr_at_max_field
    );
}
