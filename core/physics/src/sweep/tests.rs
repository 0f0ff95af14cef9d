//! Tests of the `sweep` module: published check values, recovery from forward-generated data, and bad input.

use super::*;
use crate::forward::tensor::{
    resistivity_tensor, symmetric_fields, synthetic_sweep, Carrier, SweepImperfections, SweepNoise,
};
use mobilis_numerics::noise::Rng;

// Onsager 1931: L. Onsager, Phys. Rev. 38, 2265 (reciprocal relations: rho_xx(B) = rho_xx(-B),
// rho_xy(B) = -rho_xy(-B)).

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
// into one node; two readings that agree within their stated uncertainties (1100 and 1104
// +- 2 differ by 1.4 standard deviations of their difference, a chi-square probability of
// 0.16) keep the propagated uncertainty of a mean of two, sqrt(u1^2 + u2^2) / 2 (JCGM
// 100:2008, GUM 5.1.2): their scatter is not evidence against the stated uncertainties.
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
    assert_eq!(result.repeats.merged_points, 1);
    assert_eq!(result.repeats.widened_points, 0);
    assert!(result.repeats.disagreements.is_empty());
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
    // Zero-field readings only: nothing in field to analyse.
    let zero_only = vec![good(0.0), good(5e-5)];
    let error = symmetrize(&zero_only, &settings()).unwrap_err();
    assert!(
        matches!(error, SweepError::ZeroFieldOnly { points: 2, .. }),
        "{error:?}"
    );
    assert!(error.to_string().contains("zero_field_tolerance_T"), "{error}");
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
    let message = symmetrize(&[good(1.0), good(-1.0)], &bad_settings)
        .unwrap_err()
        .to_string();
    assert!(message.contains("field_resolution_T"), "{message}");
    let bad_tolerance = SymmetrizeSettings {
        zero_field_tolerance_t: f64::NAN,
        ..settings()
    };
    let message = symmetrize(&[good(1.0), good(-1.0)], &bad_tolerance)
        .unwrap_err()
        .to_string();
    assert!(message.contains("zero_field_tolerance_T"), "{message}");
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

// Computed from the Drude sums of Beck and Anderson (J. Appl. Phys. 62, 541, 1987) with
// CODATA 2018 e, for electrons 1e16 cm^-3 at 0.1 m^2/Vs and holes 1e17 cm^-3 at 0.01 m^2/Vs
// in a 1 um layer: the resistivity at 1 T, converted to the conductivity tensor, gives the
// forward model's conductivity, and rho_0 = 3.1207545e-3 ohm m gives sigma_xx(0) =
// 320.43533 S/m (values computed once from those sums and kept here, 8 digits).
#[test]
fn sweep_conversion_matches_the_reference_values() {
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

/// A one-sign sweep of the two-carrier model with a Hall misalignment and a Hall pickup, at
/// the given signed fields, with a zero-field point.
fn one_sign_sweep(sign: f64, imperfections: &SweepImperfections) -> Vec<SweepPoint> {
    let fields: Vec<f64> = (0..=36).map(|k| sign * 0.25 * k as f64).collect();
    synthetic_sweep(
        &two_carriers(),
        &fields,
        &SweepNoise::NONE,
        imperfections,
        &mut Rng::seeded(5),
    )
    .unwrap()
}

// A sweep at one field sign is used as measured: rho_xx as the even part, rho_xy as the odd
// part (mirrored for a negative sweep: rho_xy(+|B|) = -rho_xy(-|B|)). Without contact
// imperfections that is the exact tensor (Onsager 1931: rho_xx even, rho_xy odd in B); the
// flag is set, the parts of the wrong parity are unknown (NaN) except at zero field.
#[test]
fn sweep_one_field_sign_is_used_as_measured_for_either_sign() {
    let carriers = two_carriers();
    for sign in [1.0, -1.0] {
        let sweep = one_sign_sweep(sign, &SweepImperfections::default());
        let result = symmetrize(&sweep, &settings()).unwrap();
        assert!(result.single_field_sign);
        let expected_sign = if sign > 0.0 { "positive" } else { "negative" };
        assert_eq!(result.measured_sign(), Some(expected_sign));
        assert_eq!(result.points.len(), 37);
        assert_eq!(result.overlap_t, (0.0, 9.0));
        assert_eq!(result.zero_field_points, 1);
        assert_eq!(result.positive_points + result.negative_points, 36);
        assert_eq!(result.points_outside_overlap, 0);
        assert!(result.max_rho_xx_asymmetry.is_nan() && result.max_rho_xy_asymmetry.is_nan());
        for (k, point) in result.points.iter().enumerate() {
            assert!(close(point.field_t, 0.25 * k as f64, 1e-14));
            let ideal = resistivity_tensor(&carriers, point.field_t).unwrap();
            assert!(close(point.rho_xx_ohm_sq, ideal.rho_xx_ohm_sq, 1e-13), "{point:?}");
            assert!(
                (point.rho_xy_ohm - ideal.rho_xy_ohm).abs() <= 1e-13 * ideal.rho_xx_ohm_sq,
                "{sign}: {point:?} vs {ideal:?}"
            );
            if k == 0 {
                assert_eq!((point.rho_xy_ohm, point.rho_xx_odd_ohm_sq), (0.0, 0.0));
            } else {
                assert!(point.rho_xx_odd_ohm_sq.is_nan() && point.rho_xy_even_ohm.is_nan());
            }
        }
        let warnings = result.warnings(SweepUse::Tensor);
        assert_eq!(warnings.len(), 1, "{warnings:?}");
        assert!(warnings[0].starts_with("single_field_sign") && warnings[0].contains(expected_sign));
        assert!(warnings[0].contains("misalignment"), "{}", warnings[0]);
    }
    // Both signs: no flag, no warning.
    let both = synthetic_sweep(
        &carriers,
        &symmetric_fields(9.0, 12).unwrap(),
        &SweepNoise::NONE,
        &SweepImperfections::default(),
        &mut Rng::seeded(1),
    )
    .unwrap();
    let result = symmetrize(&both, &settings()).unwrap();
    assert!(!result.single_field_sign && result.measured_sign().is_none());
    assert!(result.warnings(SweepUse::EvenRhoXx).is_empty());
}

// What one branch cannot remove stays, and is measured where it can be: with a Hall
// misalignment alpha the returned rho_xy is rho_xy + alpha rho_xx (its value at zero field,
// alpha rho_xx(0), is reported as the even part there and in the warning), and a Hall
// pickup beta stays in rho_xx as beta rho_xy.
#[test]
fn sweep_one_field_sign_keeps_the_misalignment_and_reports_it() {
    let carriers = two_carriers();
    let (alpha, beta) = (0.03, -0.02);
    let imperfections = SweepImperfections {
        hall_misalignment: alpha,
        longitudinal_hall_pickup: beta,
    };
    for sign in [1.0, -1.0] {
        let result = symmetrize(&one_sign_sweep(sign, &imperfections), &settings()).unwrap();
        let zero = &result.points[0];
        assert!(close(zero.rho_xy_even_ohm, alpha * zero.rho_xx_ohm_sq, 1e-12));
        for point in &result.points[1..] {
            let ideal = resistivity_tensor(&carriers, point.field_t).unwrap();
            // Measured at B = sign |B|: rho_xy(B) + alpha rho_xx, mirrored by the sign.
            let expected_xy = ideal.rho_xy_ohm + sign * alpha * ideal.rho_xx_ohm_sq;
            assert!(
                (point.rho_xy_ohm - expected_xy).abs() <= 1e-12 * ideal.rho_xx_ohm_sq,
                "{point:?}"
            );
            let expected_xx = ideal.rho_xx_ohm_sq + beta * sign * ideal.rho_xy_ohm;
            assert!(close(point.rho_xx_ohm_sq, expected_xx, 1e-12), "{point:?}");
        }
        let warning = &result.warnings(SweepUse::Tensor)[0];
        assert!(warning.contains("3.000e-2"), "{warning}");
        let even_only = &result.warnings(SweepUse::EvenRhoXx)[0];
        assert!(even_only.contains("rho_xx was taken as even"), "{even_only}");
    }
}

// Uncertainties of a one-sign sweep are those of its nodes: rho_xx and rho_xy keep their
// own, the correlation flips sign with the mirrored rho_xy of a negative branch, and the odd
// part at zero field carries none.
#[test]
fn sweep_one_field_sign_propagates_the_uncertainties() {
    let u = ResistivityUncertainty {
        rho_xx_ohm_sq: 2.0,
        rho_xy_ohm: 1.0,
        correlation: 0.4,
    };
    for sign in [1.0, -1.0] {
        let sweep: Vec<SweepPoint> = [0.0, 1.0, 2.0, 3.0]
            .iter()
            .map(|b| SweepPoint::new(sign * b, 1000.0 + 10.0 * b * b, sign * 50.0 * b).with_uncertainty(u))
            .collect();
        let grid = SymmetrizeSettings {
            grid: FieldGrid::Given(vec![0.0, 1.5, 3.0]),
            ..settings()
        };
        let result = symmetrize(&sweep, &grid).unwrap();
        let at = |k: usize| result.points[k].uncertainty.unwrap();
        assert_eq!(at(0).rho_xy_ohm, 0.0);
        assert!(close(at(0).rho_xx_ohm_sq, 2.0, 1e-14));
        // Halfway between two nodes: sqrt(2 (u / 2)^2).
        assert!(close(at(1).rho_xx_ohm_sq, 2.0 / 2f64.sqrt(), 1e-14));
        assert!(close(at(1).rho_xy_ohm, 1.0 / 2f64.sqrt(), 1e-14));
        assert!(close(at(1).correlation, sign * 0.4, 1e-12));
        assert!(close(result.points[1].rho_xy_ohm, 75.0, 1e-14));
        assert!(close(at(2).rho_xx_ohm_sq, 2.0, 1e-14));
        let outside = SymmetrizeSettings {
            grid: FieldGrid::Given(vec![3.5]),
            ..settings()
        };
        assert!(matches!(
            symmetrize(&sweep, &outside),
            Err(SweepError::GridOutsideOverlap { .. })
        ));
    }
}

// A sweep logged continuously along a slow ramp, every reading closer to the next than the
// field resolution: 40,000 readings from 0 to 14 T (3.5e-4 T apart) and, at a finer
// logging, 40,000 readings from 0 to 2 T (5e-5 T apart) keep their field range. Groups are
// anchored, so none is wider than the resolution, and the symmetrized sweep follows the
// model point by point.
#[test]
fn sweep_densely_logged_ramps_keep_their_field_range() {
    let carriers = two_carriers();
    for (max_field, one_sign) in [(14.0, true), (2.0, true), (2.0, false)] {
        let count = 40_000;
        let fields: Vec<f64> = (0..count)
            .map(|k| {
                let b = max_field * k as f64 / (count - 1) as f64;
                // The two-sign case ramps down through zero to -max: every other reading.
                if !one_sign && k % 2 == 1 {
                    -b
                } else {
                    b
                }
            })
            .collect();
        let sweep = synthetic_sweep(
            &carriers,
            &fields,
            &SweepNoise::NONE,
            &SweepImperfections::default(),
            &mut Rng::seeded(2),
        )
        .unwrap();
        let result = symmetrize(&sweep, &settings()).unwrap();
        assert_eq!(result.single_field_sign, one_sign);
        let (low, high) = result.overlap_t;
        assert!(
            low == 0.0 && high > 0.999 * max_field,
            "{max_field} T: overlap {low} .. {high}"
        );
        let spacing = max_field / (count - 1) as f64;
        let expected = (max_field / spacing.max(settings().field_resolution_t)) as usize;
        assert!(
            result.points.len() as f64 > 0.5 * expected as f64,
            "{} grid points for about {expected}",
            result.points.len()
        );
        assert!(result.points.windows(2).all(|w| w[0].field_t < w[1].field_t));
        for point in result.points.iter().step_by(97) {
            let ideal = resistivity_tensor(&carriers, point.field_t).unwrap();
            // Averaging within one resolution (1e-4 T) changes rho_xx by far less than 1e-6.
            assert!(close(point.rho_xx_ohm_sq, ideal.rho_xx_ohm_sq, 1e-6), "{point:?}");
        }
    }
}

// Anchored grouping: a group never spans more than the resolution, however close the
// neighbours; equal values stay in one group; chained neighbours are split.
#[test]
#[allow(clippy::single_range_in_vec_init)] // one group of index ranges is an expected value
fn sweep_anchored_groups_are_never_wider_than_the_resolution() {
    let check = |values: &[f64], resolution: f64, expected: Vec<std::ops::Range<usize>>| {
        assert_eq!(anchored_groups(values, resolution), expected, "{values:?}");
    };
    check(&[], 1.0, vec![]);
    check(&[0.0, 0.5, 1.0, 1.5, 2.0], 1.0, vec![0..3, 3..5]);
    check(&[0.0, 0.6, 1.2, 1.8], 1.0, vec![0..2, 2..4]);
    check(&[1.0, 1.0, 1.0], 0.0, vec![0..3]);
    check(&[1.0, 2.0, 3.0], 0.5, vec![0..1, 1..2, 2..3]);
    let ramp: Vec<f64> = (0..10_000).map(|k| 1e-5 * k as f64).collect();
    let groups = anchored_groups(&ramp, 1e-4);
    assert!(groups.len() >= 900, "{} groups", groups.len());
    assert!(groups.iter().all(|g| ramp[g.end - 1] - ramp[g.start] <= 1e-4));
}

// Remanence: readings at a nominal zero that read a few mT are field points unless
// zero_field_tolerance_T says otherwise. A positive-only sweep whose zero reads -3 mT has a
// "negative branch" of one point: refused (no overlap) when the positive branch starts
// higher, or used over that one field with the rest outside the overlap when it does not;
// both messages name the parameter, and raising it makes the sweep a one-sign sweep with a
// zero-field node.
#[test]
fn sweep_remanence_at_nominal_zero_is_governed_by_the_zero_field_tolerance() {
    let mut sweep = one_sign_sweep(1.0, &SweepImperfections::default());
    sweep[0].field_t = -3e-3;
    let error = symmetrize(&sweep, &settings()).unwrap_err();
    assert!(matches!(error, SweepError::NoOverlap { .. }), "{error:?}");
    assert!(error.to_string().contains("zero_field_tolerance_T"), "{error}");
    let mut low_start = sweep.clone();
    low_start.push(SweepPoint::new(1e-3, sweep[1].rho_xx_ohm_sq, 0.0));
    let result = symmetrize(&low_start, &settings()).unwrap();
    assert!(!result.single_field_sign);
    assert!(result.points_outside_overlap > 30);
    let warning = result.warnings(SweepUse::EvenRhoXx).join(" ");
    assert!(warning.contains("zero_field_tolerance_T"), "{warning}");
    let tolerant = SymmetrizeSettings {
        zero_field_tolerance_t: 5e-3,
        ..settings()
    };
    let result = symmetrize(&sweep, &tolerant).unwrap();
    assert!(result.single_field_sign);
    assert_eq!(result.zero_field_points, 1);
    assert_eq!(result.points.len(), 37);
}

// Points beyond the overlap are mentioned to every analysis only when they take a tenth of
// the field range or more; an end point of one branch a few mT beyond the other's (setpoint
// scatter) is reported by outside_overlap_warning alone (mr.symmetrize shows it).
#[test]
fn sweep_outside_overlap_is_a_warning_when_it_costs_field_range() {
    let good = |b: f64| SweepPoint::new(b, 1000.0 + b * b, 10.0 * b);
    let mut scatter: Vec<SweepPoint> = (0..=18).map(|k| good(0.5 * k as f64)).collect();
    scatter.extend((1..18).map(|k| good(-0.5 * k as f64)));
    scatter.push(good(-8.996));
    let result = symmetrize(&scatter, &settings()).unwrap();
    assert_eq!(result.points_outside_overlap, 1);
    assert_eq!(result.measured_max_field_t, 9.0);
    assert!(result.warnings(SweepUse::Tensor).is_empty());
    assert!(result
        .outside_overlap_warning()
        .unwrap()
        .contains("1 measured point(s)"));
    let mut short: Vec<SweepPoint> = (0..=18).map(|k| good(0.5 * k as f64)).collect();
    short.extend((1..=10).map(|k| good(-0.5 * k as f64)));
    let result = symmetrize(&short, &settings()).unwrap();
    assert_eq!(result.points_outside_overlap, 8);
    let warnings = result.warnings(SweepUse::Tensor);
    assert!(
        warnings.len() == 1 && warnings[0].contains("[0.0000, 5.0000] T of [0, 9.0000] T"),
        "{warnings:?}"
    );
}

// Two sweeps of one sample that do not agree (the second with rho_xx 1.5 times the first,
// as a wrong geometry factor gives) merge into points whose uncertainty is the scatter of
// the two (the standard error of the mean of two, |x1 - x2| / 2; JCGM 100:2008, GUM
// 4.2.3), not the 1e-4 each states, and the warning names the points, the worst and what
// to check. The same sweep repeated within its uncertainties keeps the propagated
// uncertainty to the bit, and so does the sweep measured once.
#[test]
fn sweep_repeats_that_disagree_widen_the_uncertainty_and_warn() {
    let carriers = vec![Carrier::hole(3e15, 2.0)];
    let fields = symmetric_fields(2.0, 12).unwrap();
    let stated = |p: SweepPoint| {
        p.with_uncertainty(ResistivityUncertainty::independent(
            1e-4 * p.rho_xx_ohm_sq,
            1e-4 * p.rho_xy_ohm.abs().max(p.rho_xx_ohm_sq),
        ))
    };
    let once: Vec<SweepPoint> = synthetic_sweep(
        &carriers,
        &fields,
        &SweepNoise::NONE,
        &SweepImperfections::default(),
        &mut Rng::seeded(0),
    )
    .unwrap()
    .into_iter()
    .map(stated)
    .collect();
    let alone = symmetrize(&once, &settings()).unwrap();
    assert_eq!(
        alone.repeats,
        RepeatSummary {
            stated_uncertainties: true,
            ..RepeatSummary::default()
        }
    );

    // Consistent: the same readings again, each moved by 0.3 of its uncertainty.
    let mut consistent = once.clone();
    consistent.extend(once.iter().map(|p| {
        let u = p.uncertainty.unwrap();
        SweepPoint {
            rho_xx_ohm_sq: p.rho_xx_ohm_sq + 0.3 * u.rho_xx_ohm_sq,
            rho_xy_ohm: p.rho_xy_ohm - 0.3 * u.rho_xy_ohm,
            ..*p
        }
    }));
    let repeated = symmetrize(&consistent, &settings()).unwrap();
    // One merged point per measured field (each branch's and the zero-field node).
    assert_eq!(repeated.repeats.merged_points, fields.len());
    assert_eq!(repeated.repeats.widened_points, 0);
    assert!(repeated.repeats.disagreements.is_empty());
    assert!(repeated.warnings(SweepUse::Tensor).is_empty());
    for (twice, single) in repeated.points.iter().zip(&alone.points) {
        // A mean of two readings of equal uncertainty: u / sqrt(2), the propagated value.
        let (u2, u1) = (twice.uncertainty.unwrap(), single.uncertainty.unwrap());
        assert!(close(u2.rho_xx_ohm_sq, u1.rho_xx_ohm_sq / 2f64.sqrt(), 1e-12));
    }

    // Disagreeing: the second copy's rho_xx 1.5 times the first's.
    let mut disagreeing = once.clone();
    disagreeing.extend(once.iter().map(|p| SweepPoint {
        rho_xx_ohm_sq: 1.5 * p.rho_xx_ohm_sq,
        ..*p
    }));
    let merged = symmetrize(&disagreeing, &settings()).unwrap();
    assert_eq!(merged.repeats.merged_points, fields.len());
    assert_eq!(merged.repeats.widened_points, fields.len());
    for (point, single) in merged.points.iter().zip(&alone.points) {
        assert!(close(point.rho_xx_ohm_sq, 1.25 * single.rho_xx_ohm_sq, 1e-12));
        // Both branches' nodes carry (1.5 - 1) rho / 2 and are averaged with weights 1/2:
        // rho / 4 / sqrt(2); at zero field the one node both branches share, rho / 4.
        let u = point.uncertainty.unwrap();
        let branches = if point.field_t == 0.0 { 1.0 } else { 2f64.sqrt() };
        assert!(
            close(u.rho_xx_ohm_sq, 0.25 * single.rho_xx_ohm_sq / branches, 1e-9),
            "{u:?} at {} T",
            point.field_t
        );
        // rho_xy agreed, so it keeps its propagated uncertainty.
        let expected_xy = single.uncertainty.unwrap().rho_xy_ohm / 2f64.sqrt();
        assert!(close(u.rho_xy_ohm, expected_xy, 1e-12), "{u:?}");
    }
    let rho_xx_disagreements = merged
        .repeats
        .disagreements
        .iter()
        .filter(|s| s.column == "rho_xx_ohm_sq");
    assert_eq!(rho_xx_disagreements.count(), fields.len());
    assert!(merged.repeats.disagreements.iter().all(|s| s.column == "rho_xx_ohm_sq"));
    for uses in [SweepUse::Tensor, SweepUse::EvenRhoXx] {
        let warnings = merged.warnings(uses);
        assert_eq!(warnings.len(), 1, "{warnings:?}");
        let warning = &warnings[0];
        assert!(
            warning.contains(&format!("at {0} of the {0} points", fields.len()))
                && warning.contains("rho_xx_ohm_sq")
                && warning.contains("Birge ratio")
                && warning.contains("field_resolution_T")
                && warning.contains("another sample"),
            "{warning}"
        );
    }

    // Without uncertainty columns the points carry none, as before, and the spread is
    // still reported (relative to |rho|: 0.5 rho_xx / sqrt(2) / |rho| at least 1 %).
    let bare: Vec<SweepPoint> = disagreeing
        .iter()
        .map(|p| SweepPoint {
            uncertainty: None,
            ..*p
        })
        .collect();
    let merged = symmetrize(&bare, &settings()).unwrap();
    assert!(merged.points.iter().all(|p| p.uncertainty.is_none()));
    assert!(!merged.repeats.stated_uncertainties);
    assert!(!merged.repeats.disagreements.is_empty());
    let warning = merged.warnings(SweepUse::EvenRhoXx).join(" ");
    assert!(
        warning.contains("rho_xx_ohm_sq_unc") && warning.contains("of |rho|"),
        "{warning}"
    );
}

// The readings of a densely logged ramp averaged with a coarse resolution lie along the
// curve at different fields: the trend across each node is not scatter, so a noise-free
// ramp keeps its propagated uncertainties and raises no warning, with or without stated
// uncertainties.
#[test]
fn sweep_coarse_groups_along_a_ramp_are_not_scatter() {
    let carriers = two_carriers();
    let fields: Vec<f64> = (0..4001).map(|k| -4.0 + 8.0 * k as f64 / 4000.0).collect();
    let ramp = synthetic_sweep(
        &carriers,
        &fields,
        &SweepNoise::NONE,
        &SweepImperfections::default(),
        &mut Rng::seeded(0),
    )
    .unwrap();
    let coarse = SymmetrizeSettings {
        field_resolution_t: 0.01,
        ..settings()
    };
    let bare = symmetrize(&ramp, &coarse).unwrap();
    assert!(bare.repeats.merged_points > 300);
    assert!(
        bare.repeats.disagreements.is_empty(),
        "{:?}",
        bare.repeats.disagreements.first()
    );
    let stated: Vec<SweepPoint> = ramp
        .iter()
        .map(|p| {
            p.with_uncertainty(ResistivityUncertainty::independent(
                1e-4 * p.rho_xx_ohm_sq,
                1e-4 * p.rho_xx_ohm_sq,
            ))
        })
        .collect();
    let result = symmetrize(&stated, &coarse).unwrap();
    assert_eq!(result.repeats.widened_points, 0);
    assert!(result.warnings(SweepUse::Tensor).is_empty());
}

// rho_xx(+B) and rho_xx(-B) of a sample with misaligned contacts differ by the field-odd
// Hall pickup, a signal the symmetrization removes, not scatter: one reading per field
// and sign leaves every uncertainty the propagated one, however large the pickup.
#[test]
fn sweep_field_sign_asymmetry_is_not_scatter() {
    let carriers = two_carriers();
    let fields = symmetric_fields(9.0, 36).unwrap();
    let imperfections = SweepImperfections {
        hall_misalignment: 0.05,
        longitudinal_hall_pickup: 0.2,
    };
    let noise = SweepNoise {
        absolute_ohm: 0.5,
        relative: 1e-4,
    };
    let sweep = synthetic_sweep(&carriers, &fields, &noise, &imperfections, &mut Rng::seeded(5)).unwrap();
    let result = symmetrize(&sweep, &settings()).unwrap();
    assert!(result.max_rho_xx_asymmetry > 0.01);
    assert_eq!(result.repeats.merged_points, 0);
    assert!(result.repeat_warning(SweepUse::Tensor).is_none());
    let at_field = result.points.iter().find(|p| p.field_t > 1.0).unwrap();
    let raw: Vec<&SweepPoint> = sweep
        .iter()
        .filter(|p| (p.field_t.abs() - at_field.field_t).abs() < 1e-9)
        .collect();
    assert_eq!(raw.len(), 2);
    let expected = raw
        .iter()
        .map(|p| p.uncertainty.unwrap().rho_xx_ohm_sq.powi(2))
        .sum::<f64>()
        .sqrt()
        / 2.0;
    assert!(close(at_field.uncertainty.unwrap().rho_xx_ohm_sq, expected, 1e-12));
}

// The rule for a plain list of readings: the larger of the propagated and the scatter's
// uncertainty of the mean with stated uncertainties, the scatter's alone without
// (JCGM 100:2008, GUM 4.2.3: s / sqrt(k)).
#[test]
fn sweep_repeated_readings_uncertainty_takes_the_larger() {
    // 10 and 12 +- 0.1: the scatter's |12 - 10| / 2 = 1 over the propagated 0.0707.
    let u = repeated_readings_uncertainty(&[10.0, 12.0], Some(&[0.1, 0.1])).unwrap();
    assert!(close(u, 1.0, 1e-15));
    // 10 and 10.01 +- 0.1: the propagated sqrt(0.02) / 2.
    let u = repeated_readings_uncertainty(&[10.0, 10.01], Some(&[0.1, 0.1])).unwrap();
    assert!(close(u, 0.02f64.sqrt() / 2.0, 1e-15));
    assert_eq!(repeated_readings_uncertainty(&[10.0], Some(&[0.1])), Some(0.1));
    assert_eq!(repeated_readings_uncertainty(&[10.0], None), None);
    let u = repeated_readings_uncertainty(&[10.0, 11.0, 12.0], None).unwrap();
    assert!(close(u, (1.0f64 / 3.0).sqrt(), 1e-15));
}
