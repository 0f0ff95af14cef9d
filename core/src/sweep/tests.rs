//! Tests of the `sweep` module: published check values, recovery from forward-generated data, and bad input.

use super::*;
use crate::forward::tensor::{
    resistivity_tensor, symmetric_fields, synthetic_sweep, Carrier, SweepImperfections, SweepNoise,
};
use crate::noise::Rng;

fn close(actual: f64, expected: f64, relative: f64) -> bool {
    (actual - expected).abs() <= relative * expected.abs()
}

fn two_carriers() -> Vec<Carrier> {
    vec![Carrier::electron(3e16, 0.6), Carrier::hole(8e16, 0.04)]
}

fn settings() -> SymmetrizeSettings {
    SymmetrizeSettings::default()
}

// Even part of rho_xx and odd part of rho_xy remove a Hall misalignment (even) and a
// longitudinal Hall pickup (odd) exactly when both branches share their fields; the parts
// removed are alpha rho_xx and beta rho_xy.
#[test]
fn sweep_same_fields_removes_misalignment_exactly() {
    let carriers = two_carriers();
    let fields = symmetric_fields(9.0, 36).unwrap();
    let imperfections = SweepImperfections {
        hall_misalignment: 0.03,
        longitudinal_hall_pickup: -0.02,
    };
    let sweep = synthetic_sweep(
        &carriers,
        &fields,
        &SweepNoise::NONE,
        &imperfections,
        &mut Rng::seeded(3),
    )
    .unwrap();
    let result = symmetrize(&sweep, &settings()).unwrap();
    assert_eq!(result.points.len(), 37);
    assert_eq!(result.overlap_t, (0.0, 9.0));
    assert_eq!(
        (result.positive_points, result.negative_points, result.zero_field_points),
        (36, 36, 1)
    );
    assert_eq!(result.points_outside_overlap, 0);
    for (k, point) in result.points.iter().enumerate() {
        assert!(close(point.field_t, 0.25 * k as f64, 1e-14));
        let ideal = resistivity_tensor(&carriers, point.field_t).unwrap();
        assert!(close(point.rho_xx_ohm_sq, ideal.rho_xx_ohm_sq, 1e-13), "{point:?}");
        assert!(
            (point.rho_xy_ohm - ideal.rho_xy_ohm).abs() <= 1e-13 * ideal.rho_xx_ohm_sq,
            "{point:?}"
        );
        assert!(close(point.rho_xy_even_ohm, 0.03 * ideal.rho_xx_ohm_sq, 1e-12));
        assert!((point.rho_xx_odd_ohm_sq + 0.02 * ideal.rho_xy_ohm).abs() <= 1e-13 * ideal.rho_xx_ohm_sq);
        assert!(point.uncertainty.is_none());
    }
    assert!(close(result.max_rho_xy_asymmetry, 0.03, 1e-12));
    let expected_xx = result
        .points
        .iter()
        .map(|p| {
            let ideal = resistivity_tensor(&carriers, p.field_t).unwrap();
            0.02 * ideal.rho_xy_ohm.abs() / ideal.rho_xx_ohm_sq
        })
        .fold(0.0, f64::max);
    assert!(close(result.max_rho_xx_asymmetry, expected_xx, 1e-10));
}

// Linear interpolation is exact for data linear in |B| on each branch, so branches measured
// at different fields give the exact parts: rho_xx = r0 + k B has even part r0 and odd part
// k |B|; rho_xy = h B + m has odd part h |B| and even part m.
#[test]
fn sweep_branches_on_different_fields_are_interpolated() {
    let (r0, k, h, m) = (1500.0, 12.0, -85.0, 4.0);
    let point = |b: f64| SweepPoint::new(b, r0 + k * b, h * b + m);
    let mut sweep: Vec<SweepPoint> = (1..=10).map(|i| point(0.5 * i as f64)).collect();
    sweep.extend((0..=10).map(|i| point(-(0.3 + 0.5 * i as f64))));
    let result = symmetrize(&sweep, &settings()).unwrap();
    assert_eq!(result.overlap_t, (0.5, 5.0));
    // Positive nodes 0.5 .. 5.0 (10) and the negative ones inside, 0.8 .. 4.8 (9); the
    // negative 0.3 and 5.3 lie outside.
    assert_eq!(result.points.len(), 19);
    assert_eq!(result.points_outside_overlap, 2);
    for p in &result.points {
        assert!(close(p.rho_xx_ohm_sq, r0, 1e-13), "{p:?}");
        assert!(close(p.rho_xx_odd_ohm_sq, k * p.field_t, 1e-12), "{p:?}");
        assert!(close(p.rho_xy_ohm, h * p.field_t, 1e-12), "{p:?}");
        assert!(close(p.rho_xy_even_ohm, m, 1e-11), "{p:?}");
    }
    let fields: Vec<f64> = result.points.iter().map(|p| p.field_t).collect();
    assert!(fields.windows(2).all(|w| w[0] < w[1]));
}

// A curved sweep: the error of each symmetrized value is half the linear-interpolation
// error of one branch, at most h^2 max|f''| / 16 for node spacing h (the standard bound
// h^2 max|f''| / 8 of linear interpolation).
#[test]
fn sweep_interpolation_error_stays_within_the_linear_interpolation_bound() {
    let carriers = two_carriers();
    let step = 0.2;
    let mut fields: Vec<f64> = (0..=45).map(|i| step * i as f64).collect();
    fields.extend((0..45).map(|i| -(0.1 + step * i as f64)));
    let sweep = synthetic_sweep(
        &carriers,
        &fields,
        &SweepNoise::NONE,
        &SweepImperfections::default(),
        &mut Rng::seeded(0),
    )
    .unwrap();
    let result = symmetrize(&sweep, &settings()).unwrap();
    // Second derivatives of the model by central differences on a fine grid.
    let fine = 1e-3;
    let curvature = |f: &dyn Fn(f64) -> f64| {
        (1..9000)
            .map(|i| {
                let b = fine * i as f64;
                ((f(b + fine) - 2.0 * f(b) + f(b - fine)) / (fine * fine)).abs()
            })
            .fold(0.0, f64::max)
    };
    let rho_xx = |b: f64| resistivity_tensor(&carriers, b).unwrap().rho_xx_ohm_sq;
    let rho_xy = |b: f64| resistivity_tensor(&carriers, b).unwrap().rho_xy_ohm;
    let bound_xx = 1.05 * step * step * curvature(&rho_xx) / 16.0;
    let bound_xy = 1.05 * step * step * curvature(&rho_xy) / 16.0;
    let mut worst_xx = 0.0f64;
    for p in &result.points {
        let ideal = resistivity_tensor(&carriers, p.field_t).unwrap();
        let error_xx = (p.rho_xx_ohm_sq - ideal.rho_xx_ohm_sq).abs();
        assert!(error_xx <= bound_xx, "{} T: {error_xx} > {bound_xx}", p.field_t);
        assert!((p.rho_xy_ohm - ideal.rho_xy_ohm).abs() <= bound_xy, "{} T", p.field_t);
        worst_xx = worst_xx.max(error_xx);
    }
    // The bound is not vacuous: the interpolation does leave an error of its order.
    assert!(worst_xx > 0.05 * bound_xx, "{worst_xx} vs {bound_xx}");
}

// Zero-field readings form one node shared by both branches: the antisymmetrized rho_xy is
// exactly 0 there with no uncertainty, its even part is the zero-field offset, and the
// uncertainty of a grid point interpolated towards zero counts the shared node once.
#[test]
fn sweep_zero_field_node_is_shared_by_both_branches() {
    let u = |xx: f64, xy: f64| ResistivityUncertainty::independent(xx, xy);
    let sweep = vec![
        SweepPoint::new(0.0, 1000.0, 3.0).with_uncertainty(u(2.0, 1.0)),
        SweepPoint::new(5e-5, 1002.0, 5.0).with_uncertainty(u(2.0, 1.0)),
        SweepPoint::new(1.0, 1100.0, 60.0).with_uncertainty(u(3.0, 1.5)),
        SweepPoint::new(2.0, 1300.0, 120.0).with_uncertainty(u(3.0, 1.5)),
        SweepPoint::new(-0.5, 1030.0, -26.0).with_uncertainty(u(4.0, 2.0)),
        SweepPoint::new(-1.0, 1098.0, -52.0).with_uncertainty(u(3.0, 1.5)),
        SweepPoint::new(-2.0, 1290.0, -116.0).with_uncertainty(u(3.0, 1.5)),
    ];
    let result = symmetrize(&sweep, &settings()).unwrap();
    let fields: Vec<f64> = result.points.iter().map(|p| p.field_t).collect();
    assert_eq!(fields, vec![0.0, 0.5, 1.0, 2.0]);
    assert_eq!(result.zero_field_points, 2);
    let zero = &result.points[0];
    assert_eq!(zero.rho_xy_ohm, 0.0);
    assert!(close(zero.rho_xx_ohm_sq, 1001.0, 1e-15));
    assert!(close(zero.rho_xy_even_ohm, 4.0, 1e-15));
    let zero_unc = zero.uncertainty.unwrap();
    assert!(close(zero_unc.rho_xx_ohm_sq, (8.0f64).sqrt() / 2.0, 1e-14));
    assert_eq!(zero_unc.rho_xy_ohm, 0.0);
    // At 0.5 T the positive branch is halfway between the zero node (z) and +1 T (p); the
    // negative branch has its own node (q): rho_xx = (z/2 + p/2)/2 + q/2.
    let half = &result.points[1];
    let (z_xx, z_xy, p_xx, p_xy, q_xx, q_xy) = (1001.0, 4.0, 1100.0, 60.0, 1030.0, -26.0);
    assert!(close(half.rho_xx_ohm_sq, 0.25 * z_xx + 0.25 * p_xx + 0.5 * q_xx, 1e-14));
    assert!(close(half.rho_xy_ohm, 0.25 * z_xy + 0.25 * p_xy - 0.5 * q_xy, 1e-14));
    let half_unc = half.uncertainty.unwrap();
    // Node variances: zero node (4 + 4)/4 = 2 and (1 + 1)/4 = 0.5; +1 T 9 and 2.25; q 16, 4.
    let var_xx: f64 = 0.0625 * 2.0 + 0.0625 * 9.0 + 0.25 * 16.0;
    let var_xy: f64 = 0.0625 * 0.5 + 0.0625 * 2.25 + 0.25 * 4.0;
    assert!(close(half_unc.rho_xx_ohm_sq, var_xx.sqrt(), 1e-14));
    assert!(close(half_unc.rho_xy_ohm, var_xy.sqrt(), 1e-14));
    assert_eq!(half_unc.correlation, 0.0);
}

// Repeats (an up and a down sweep whose fields differ by less than the resolution) average
// into one node; the uncertainty of a mean of two is sqrt(u1^2 + u2^2) / 2.
#[test]
fn sweep_repeats_within_the_resolution_are_averaged() {
    let u = ResistivityUncertainty::independent(2.0, 1.0);
    let sweep = vec![
        SweepPoint::new(1.0, 1100.0, 50.0).with_uncertainty(u),
        SweepPoint::new(1.00004, 1104.0, 52.0).with_uncertainty(u),
        SweepPoint::new(-1.0, 1102.0, -50.0).with_uncertainty(u),
        SweepPoint::new(2.0, 1400.0, 100.0).with_uncertainty(u),
        SweepPoint::new(-2.0, 1400.0, -100.0).with_uncertainty(u),
    ];
    let result = symmetrize(&sweep, &settings()).unwrap();
    assert_eq!(result.points.len(), 2);
    assert_eq!(result.points_outside_overlap, 0);
    let first = &result.points[0];
    // The positive repeats are one node at 1.00002 T; the negative node at 1.0 T is within
    // the resolution, so the union gives one grid field, clamped to the overlap's lower
    // end 1.00002 T, where the negative branch is interpolated with w = 2e-5.
    assert!(close(first.field_t, 1.00002, 1e-13));
    let w = 0.00002;
    let negative = (1.0 - w) * 1102.0 + w * 1400.0;
    assert!(close(first.rho_xx_ohm_sq, (1102.0 + negative) / 2.0, 1e-13));
    let unc = first.uncertainty.unwrap();
    let var_positive = (4.0 + 4.0) / 4.0;
    let var_negative = (1.0 - w).powi(2) * 4.0 + w * w * 4.0;
    assert!(close(
        unc.rho_xx_ohm_sq,
        ((var_positive + var_negative) / 4.0).sqrt(),
        1e-12
    ));
}

#[test]
fn sweep_given_grid_is_used_and_checked_against_the_overlap() {
    let sweep = synthetic_sweep(
        &two_carriers(),
        &symmetric_fields(9.0, 18).unwrap(),
        &SweepNoise::NONE,
        &SweepImperfections::default(),
        &mut Rng::seeded(0),
    )
    .unwrap();
    let grid = SymmetrizeSettings {
        grid: FieldGrid::Given(vec![3.0, 0.25, 9.0, 3.0]),
        ..settings()
    };
    let result = symmetrize(&sweep, &grid).unwrap();
    let fields: Vec<f64> = result.points.iter().map(|p| p.field_t).collect();
    assert_eq!(fields, vec![0.25, 3.0, 9.0]);
    let outside = SymmetrizeSettings {
        grid: FieldGrid::Given(vec![1.0, 9.5]),
        ..settings()
    };
    let error = symmetrize(&sweep, &outside).unwrap_err();
    assert!(matches!(error, SweepError::GridOutsideOverlap { field_t, .. } if field_t == 9.5));
    assert!(error.to_string().contains("give grid fields within it"));
    let nan = SymmetrizeSettings {
        grid: FieldGrid::Given(vec![f64::NAN]),
        ..settings()
    };
    assert!(matches!(
        symmetrize(&sweep, &nan),
        Err(SweepError::InvalidGridField { .. })
    ));
}

#[test]
fn sweep_refuses_bad_input_with_clear_errors() {
    let good = |b: f64| SweepPoint::new(b, 1000.0 + b * b, 10.0 * b);
    assert_eq!(symmetrize(&[], &settings()), Err(SweepError::Empty));
    // One field sign only: the parts cannot be separated.
    let positive_only: Vec<SweepPoint> = [0.0, 1.0, 2.0].iter().map(|b| good(*b)).collect();
    let error = symmetrize(&positive_only, &settings()).unwrap_err();
    assert!(
        matches!(
            error,
            SweepError::OneFieldSign {
                missing: "negative",
                ..
            }
        ),
        "{error:?}"
    );
    assert!(error.to_string().contains("measure the negative branch too"), "{error}");
    let negative_only: Vec<SweepPoint> = [-1.0, -2.0].iter().map(|b| good(*b)).collect();
    assert!(matches!(
        symmetrize(&negative_only, &settings()),
        Err(SweepError::OneFieldSign {
            missing: "positive",
            ..
        })
    ));
    let zero_only = vec![good(0.0), good(0.0)];
    assert!(matches!(
        symmetrize(&zero_only, &settings()),
        Err(SweepError::OneFieldSign { .. })
    ));
    // NaN anywhere.
    let mut nan_field = vec![good(1.0), good(-1.0)];
    nan_field[1].field_t = f64::NAN;
    assert!(matches!(
        symmetrize(&nan_field, &settings()),
        Err(SweepError::NonFinite {
            index: 1,
            column: "field_T",
            ..
        })
    ));
    let mut nan_hall = vec![good(1.0), good(-1.0)];
    nan_hall[0].rho_xy_ohm = f64::NAN;
    assert!(matches!(
        symmetrize(&nan_hall, &settings()),
        Err(SweepError::NonFinite {
            index: 0,
            column: "rho_xy_ohm",
            ..
        })
    ));
    // rho_xx <= 0.
    for bad in [0.0, -5.0] {
        let mut sweep = vec![good(1.0), good(-1.0), good(2.0)];
        sweep[2].rho_xx_ohm_sq = bad;
        let error = symmetrize(&sweep, &settings()).unwrap_err();
        assert!(
            matches!(error, SweepError::NonPositiveRhoXx { index: 2, .. }),
            "{error:?}"
        );
        assert!(error.to_string().contains("check the voltage polarity"));
    }
    // Uncertainties: all or none, positive, correlation within (-1, 1).
    let u = ResistivityUncertainty::independent(1.0, 1.0);
    let mixed = vec![good(1.0).with_uncertainty(u), good(-1.0)];
    assert_eq!(
        symmetrize(&mixed, &settings()),
        Err(SweepError::MixedUncertainties { with: 1, without: 1 })
    );
    let negative_unc = vec![
        good(1.0).with_uncertainty(ResistivityUncertainty::independent(-1.0, 1.0)),
        good(-1.0).with_uncertainty(u),
    ];
    assert!(matches!(
        symmetrize(&negative_unc, &settings()),
        Err(SweepError::InvalidUncertainty { index: 0, .. })
    ));
    let full_correlation = vec![
        good(1.0).with_uncertainty(u),
        good(-1.0).with_uncertainty(ResistivityUncertainty { correlation: 1.0, ..u }),
    ];
    assert!(matches!(
        symmetrize(&full_correlation, &settings()),
        Err(SweepError::InvalidUncertainty {
            index: 1,
            column: "correlation",
            ..
        })
    ));
    // Branches over disjoint field ranges.
    let disjoint = vec![good(0.5), good(1.0), good(-2.0), good(-3.0)];
    let error = symmetrize(&disjoint, &settings()).unwrap_err();
    assert!(matches!(error, SweepError::NoOverlap { .. }), "{error:?}");
    // Settings.
    let bad_settings = SymmetrizeSettings {
        field_resolution_t: -1.0,
        ..settings()
    };
    assert!(matches!(
        symmetrize(&[good(1.0), good(-1.0)], &bad_settings),
        Err(SweepError::InvalidSetting { .. })
    ));
    // Error messages carry no trailing period.
    assert!(!error.to_string().ends_with('.'));
}

// The propagated uncertainties describe the actual scatter: over many noisy realizations
// of a sweep whose branches sit on different fields, the deviations of the symmetrized
// values from the noise-free symmetrization, divided by the reported uncertainty, have
// unit variance.
#[test]
fn sweep_propagated_uncertainty_matches_the_scatter() {
    let carriers = two_carriers();
    let mut fields: Vec<f64> = (0..=20).map(|i| 0.4 * i as f64).collect();
    fields.extend((0..20).map(|i| -(0.15 + 0.4 * i as f64)));
    let noise = SweepNoise {
        absolute_ohm: 0.5,
        relative: 1e-3,
    };
    let exact = symmetrize(
        &synthetic_sweep(
            &carriers,
            &fields,
            &SweepNoise::NONE,
            &SweepImperfections::default(),
            &mut Rng::seeded(0),
        )
        .unwrap(),
        &settings(),
    )
    .unwrap();
    let mut rng = Rng::seeded(77);
    let (mut z_xx, mut z_xy) = (Vec::new(), Vec::new());
    for _ in 0..200 {
        let sweep = synthetic_sweep(&carriers, &fields, &noise, &SweepImperfections::default(), &mut rng).unwrap();
        let result = symmetrize(&sweep, &settings()).unwrap();
        assert_eq!(result.points.len(), exact.points.len());
        for (p, e) in result.points.iter().zip(&exact.points) {
            let u = p.uncertainty.unwrap();
            z_xx.push((p.rho_xx_ohm_sq - e.rho_xx_ohm_sq) / u.rho_xx_ohm_sq);
            if p.field_t > 0.0 {
                z_xy.push((p.rho_xy_ohm - e.rho_xy_ohm) / u.rho_xy_ohm);
            }
        }
    }
    for z in [&z_xx, &z_xy] {
        let n = z.len() as f64;
        let variance = z.iter().map(|v| v * v).sum::<f64>() / n;
        // About 8000 deviates, but neighbouring grid points share nodes, so only about
        // 3000 are independent: a standard error of sqrt(2 / 3000) = 0.026 on the
        // variance, and the bound is 4 of them.
        assert!((variance - 1.0).abs() < 0.1, "variance {variance}");
    }
}

// Conversion to the conductivity tensor and back is the identity, values and
// uncertainties (with their correlation), and the first-order propagation agrees with a
// Jacobian from central differences of the inversion.
#[test]
fn sweep_tensor_conversion_round_trip_and_propagation() {
    let mut rng = Rng::seeded(11);
    for _ in 0..200 {
        let rho_xx = rng.uniform_between(10.0, 1e5);
        let rho_xy = rng.uniform_between(-3.0, 3.0) * rho_xx;
        let unc = ResistivityUncertainty {
            rho_xx_ohm_sq: rng.uniform_between(1e-4, 1e-2) * rho_xx,
            rho_xy_ohm: rng.uniform_between(1e-4, 1e-2) * rho_xx,
            correlation: rng.uniform_between(-0.9, 0.9),
        };
        let point = SweepPoint::new(1.0, rho_xx, rho_xy).with_uncertainty(unc);
        let sigma = conductivity_point(&point);
        let back = resistivity_point(&sigma);
        assert!(close(back.rho_xx_ohm_sq, rho_xx, 1e-14));
        assert!((back.rho_xy_ohm - rho_xy).abs() <= 1e-14 * rho_xx);
        let back_unc = back.uncertainty.unwrap();
        assert!(close(back_unc.rho_xx_ohm_sq, unc.rho_xx_ohm_sq, 1e-10));
        assert!(close(back_unc.rho_xy_ohm, unc.rho_xy_ohm, 1e-10));
        assert!((back_unc.correlation - unc.correlation).abs() < 1e-10);
        // Numerical Jacobian of (a, b) -> (a, b) / (a^2 + b^2).
        let h = 1e-6 * rho_xx;
        let column = |da: f64, db: f64| {
            let plus = invert_tensor(rho_xx + da, rho_xy + db);
            let minus = invert_tensor(rho_xx - da, rho_xy - db);
            [(plus.0 - minus.0) / (2.0 * h), (plus.1 - minus.1) / (2.0 * h)]
        };
        let (ja, jb) = (column(h, 0.0), column(0.0, h));
        let s = [
            [
                unc.rho_xx_ohm_sq.powi(2),
                unc.correlation * unc.rho_xx_ohm_sq * unc.rho_xy_ohm,
            ],
            [
                unc.correlation * unc.rho_xx_ohm_sq * unc.rho_xy_ohm,
                unc.rho_xy_ohm.powi(2),
            ],
        ];
        let var = |r: usize| {
            let j = [ja[r], jb[r]];
            (0..2)
                .flat_map(|k| (0..2).map(move |l| (k, l)))
                .map(|(k, l)| j[k] * s[k][l] * j[l])
                .sum::<f64>()
        };
        let u = sigma.uncertainty.unwrap();
        assert!(close(u.sigma_xx_s, var(0).sqrt(), 1e-6), "{u:?} vs {}", var(0).sqrt());
        assert!(close(u.sigma_xy_s, var(1).sqrt(), 1e-6));
    }
}

// Computed from the Beck and Anderson sums (check-values, "Multi-carrier conductivity"):
// the check-value resistivity at 1 T, converted to the conductivity tensor, gives the
// forward model's conductivity, and rho_0 = 3.1207545e-3 ohm m gives sigma_xx(0) =
// 320.43533 S/m through a 1 um thickness.
#[test]
fn sweep_conversion_matches_the_check_values() {
    let thickness = Thickness::new(1e-6, None).unwrap();
    let sheet = |rho_ohm_m: f64| thickness.sheet_resistivity_ohm(Measured::new(rho_ohm_m, None)).value;
    let zero = conductivity_point(&SweepPoint::new(0.0, sheet(3.120_754_5e-3), 0.0));
    let sigma_0 = thickness.volume_conductivity_s_per_m(Measured::new(zero.sigma_xx_s, None));
    assert!(close(sigma_0.value, 320.435_33, 1e-6), "{sigma_0:?}");
    let carriers = [Carrier::electron(1e22 * 1e-6, 0.1), Carrier::hole(1e23 * 1e-6, 0.01)];
    let one = conductivity_point(&SweepPoint::new(1.0, sheet(3.130_175_7e-3), sheet(-1.400_100_0e-4)));
    let model = crate::forward::tensor::conductivity_tensor(&carriers, 1.0).unwrap();
    assert!(close(one.sigma_xx_s, model.sigma_xx_s, 1e-6));
    assert!(close(one.sigma_xy_s, model.sigma_xy_s, 1e-6));
}

#[test]
fn sweep_thickness_converts_sheet_and_volume_quantities() {
    let t = Thickness::new(2e-6, Some(2e-8)).unwrap();
    // rho = rho_s t; relative uncertainties add in quadrature: 0.1 % and 1 %.
    let rho = t.volume_resistivity_ohm_m(Measured::new(1500.0, Some(1.5)));
    assert!(close(rho.value, 3e-3, 1e-15));
    assert!(close(rho.unc.unwrap(), 3e-3 * (1e-6f64 + 1e-4).sqrt(), 1e-12));
    let n = t.volume_density_m3(Measured::new(4e16, Some(4e14)));
    assert!(close(n.value, 2e22, 1e-15));
    assert!(close(n.unc.unwrap(), 2e22 * (2e-4f64).sqrt(), 1e-12));
    // A zero value (rho_xy at zero field) keeps the uncertainty of its own measurement.
    let zero = t.volume_resistivity_ohm_m(Measured::new(0.0, Some(1.0)));
    assert!(close(zero.unc.unwrap(), 2e-6, 1e-15));
    // No uncertainty anywhere: none out; thickness uncertainty alone propagates.
    let bare = Thickness::new(2e-6, None).unwrap();
    assert_eq!(bare.volume_density_m3(Measured::new(4e16, None)).unc, None);
    assert!(close(
        t.volume_density_m3(Measured::new(4e16, None)).unc.unwrap(),
        2e20,
        1e-12
    ));
    // Sheet from volume undoes volume from sheet.
    let back = bare.sheet_resistivity_ohm(bare.volume_resistivity_ohm_m(Measured::new(1500.0, None)));
    assert!(close(back.value, 1500.0, 1e-15));
    for bad in [0.0, -1e-6, f64::NAN, f64::INFINITY] {
        assert!(matches!(
            Thickness::new(bad, None),
            Err(SweepError::InvalidThickness { .. })
        ));
    }
    assert!(matches!(
        Thickness::new(1e-6, Some(-1e-9)),
        Err(SweepError::InvalidThicknessUncertainty { .. })
    ));
}
