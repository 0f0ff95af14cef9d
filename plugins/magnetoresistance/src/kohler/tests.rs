//! Tests of the `kohler` module: published check values, recovery from forward-generated data, and bad input.

use super::*;
use crate::ratio::{magnetoresistance, RatioSettings};
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::tensor::{symmetric_fields, synthetic_sweep, Carrier, SweepImperfections, SweepNoise};

const TEMPERATURES: [f64; 4] = [50.0, 100.0, 200.0, 300.0];

/// Kohler curves of a two-band sample at `TEMPERATURES`, its carriers at each temperature
/// from `carriers_at`, swept to 9 T in 0.01 T steps.
fn curves(carriers_at: impl Fn(f64) -> Vec<Carrier>, noise: SweepNoise) -> Vec<KohlerCurve> {
    let fields = symmetric_fields(9.0, 900).unwrap();
    TEMPERATURES
        .iter()
        .enumerate()
        .map(|(k, &t)| {
            let points = synthetic_sweep(
                &carriers_at(t),
                &fields,
                &noise,
                &SweepImperfections::default(),
                &mut Rng::seeded(100 + k as u64),
            )
            .unwrap();
            KohlerCurve::from_ratio(t, &magnetoresistance(&points, &RatioSettings::default()).unwrap())
        })
        .collect()
}

/// One relaxation time scaling as 1/T: both mobilities carry the same factor 300/T, the
/// densities stay.
fn common_scattering_time(t: f64) -> Vec<Carrier> {
    let c = 300.0 / t;
    vec![Carrier::electron(2e15, 0.5 * c), Carrier::hole(5e15, 0.1 * c)]
}

fn noise() -> SweepNoise {
    SweepNoise {
        absolute_ohm: 0.02,
        relative: 1e-4,
    }
}

fn power_law_curve(temperature_k: f64, rho0_ohm_sq: f64, prefactor: f64, exponent: f64) -> KohlerCurve {
    KohlerCurve {
        temperature_k,
        rho0_ohm_sq,
        points: (0..=90)
            .map(|k| {
                let field_t = 0.1 * k as f64;
                KohlerInput {
                    field_t,
                    mr: prefactor * (field_t / rho0_ohm_sq).powf(exponent),
                    mr_unc: None,
                }
            })
            .collect(),
    }
}

// The measure itself on curves whose answer is known in closed form: two power laws
// MR = a x^2 and 1.1 a x^2 are ln 1.1 apart in ln MR everywhere, so the sample standard
// deviation of the two is ln(1.1) / sqrt(2) = 0.0673945 at every grid point (computed from
// the definition of the spread in the module documentation); the resampling is exact for a
// power law.
#[test]
fn kohler_spread_of_two_power_laws_is_exact() {
    let curves = [
        power_law_curve(10.0, 100.0, 50.0, 2.0),
        power_law_curve(20.0, 50.0, 55.0, 2.0),
    ];
    let analysis = kohler(&curves, &KohlerSettings::default()).unwrap();
    // Overlap: curve 1 covers x = 0.1/100 .. 9/100, curve 2 0.1/50 .. 9/50.
    assert!((analysis.overlap_t_per_ohm.0 - 0.002).abs() < 1e-15);
    assert!((analysis.overlap_t_per_ohm.1 - 0.09).abs() < 1e-15);
    assert_eq!(analysis.grid.len(), 30);
    let expected = 1.1f64.ln() / 2f64.sqrt();
    for g in &analysis.grid {
        assert_eq!(g.curves, 2);
        assert!((g.spread.unwrap() - expected).abs() < 1e-12, "{g:?}");
        assert_eq!(g.excess_spread, g.spread);
        assert_eq!(g.noise_spread, None);
        assert_eq!(g.collapsed, Some(false));
        let master = 50.0 * 1.1f64.sqrt() * g.x_t_per_ohm.powi(2);
        assert!((g.master_mr.unwrap() / master - 1.0).abs() < 1e-12);
    }
    assert_eq!(analysis.holds, Some(false));
    assert_eq!(analysis.failures.len(), 1);
    let failure = analysis.failures[0];
    assert!((failure.x_low_t_per_ohm - 0.002).abs() < 1e-15 && (failure.x_high_t_per_ohm - 0.09).abs() < 1e-15);
    assert!((failure.max_excess_spread - expected).abs() < 1e-12);
    // The leave-one-out deviation of each is the whole difference, with its sign.
    let d = 1.1f64.ln();
    assert!((analysis.deviations[0].mean_deviation.unwrap() + d).abs() < 1e-12);
    assert!((analysis.deviations[1].mean_deviation.unwrap() - d).abs() < 1e-12);
    assert!((analysis.deviations[1].rms_deviation.unwrap() - d).abs() < 1e-12);
    for (law, a) in analysis.power_laws.iter().zip([50.0, 55.0]) {
        let law = law.unwrap();
        assert!((law.exponent - 2.0).abs() < 1e-10, "{law:?}");
        assert!((law.prefactor / a - 1.0).abs() < 1e-9, "{law:?}");
        assert_eq!(law.points, 90);
    }
    // The zero-field points are on the axes table but not used.
    assert_eq!(analysis.points.len(), 182);
    assert_eq!(analysis.points.iter().filter(|p| !p.used).count(), 2);
    // The same curves hold for a tolerance above the spread.
    let loose = KohlerSettings {
        tolerance: 0.07,
        ..Default::default()
    };
    let analysis = kohler(&curves, &loose).unwrap();
    assert_eq!(analysis.holds, Some(true));
    assert!(analysis.failures.is_empty());
}

// Kohler's rule for a two-band conductor with one relaxation time (M. Kohler, Ann. Phys.
// 424, 211, 1938, from memory: MR = F(B / rho_0)): scaling both mobilities by a common factor at
// fixed densities multiplies rho(0) by its inverse and MR depends on mu_i B only, so the
// curves coincide exactly. What remains is the resampling error: a line through the curved
// ln MR over a bin of half width w (0.13 in ln x here) is off by about f'' w^2 / 6, up to
// 1e-3 where the curves bend most, and a curve evaluated at its own end (no bin) is not off
// at all, so the spread there is of that size; 2e-3 is 25 times below the tolerance.
#[test]
fn kohler_holds_for_a_common_scattering_time() {
    let curves = curves(common_scattering_time, SweepNoise::NONE);
    let analysis = kohler(&curves, &KohlerSettings::default()).unwrap();
    assert_eq!(analysis.holds, Some(true), "{:?}", analysis.failures);
    assert!(
        analysis.max_excess_spread.unwrap() < 2e-3,
        "{:?}",
        analysis.max_excess_spread
    );
    assert!(analysis.grid.iter().all(|g| g.curves >= 2));
    // The low-x exponent is 2 and the prefactors agree. The two-band MR that follows from the
    // two-band rho_xx (Ashcroft and Mermin 1976, ch. 12, problem 4; from memory) is
    // MR = A B^2 / (1 + g B^2), g = ((sigma_e mu_h + sigma_h mu_e) /
    // (sigma_e + sigma_h))^2 with signed mobilities, 0.01 T^-2 at 300 K here; up to 0.2 T at
    // 300 K (the same x at the other temperatures) its local exponent differs from 2 by
    // 2 g B^2 / (1 + g B^2) < 1e-3.
    let rho0_300 = curves[3].rho0_ohm_sq;
    let settings = KohlerSettings {
        power_law_range: Some((1e-9, 0.2 / rho0_300)),
        ..Default::default()
    };
    let analysis = kohler(&curves, &settings).unwrap();
    let laws: Vec<PowerLaw> = analysis.power_laws.iter().map(|l| l.unwrap()).collect();
    for law in &laws {
        assert!((law.exponent - 2.0).abs() < 1e-3, "{law:?}");
        assert!((law.prefactor / laws[0].prefactor - 1.0).abs() < 1e-2, "{law:?}");
    }
}

// The same sample with measurement noise: the verdict must survive it (the noise is far
// below the tolerance where MR is resolved, and excluded where it is not).
#[test]
fn kohler_holds_for_a_common_scattering_time_with_noise() {
    let curves = curves(common_scattering_time, noise());
    assert!(curves[0].points.iter().all(|p| p.mr_unc.is_some()));
    let analysis = kohler(&curves, &KohlerSettings::default()).unwrap();
    assert_eq!(analysis.holds, Some(true), "{:?}", analysis.failures);
    assert!(
        analysis.rms_excess_spread.unwrap() < 0.01,
        "{:?}",
        analysis.rms_excess_spread
    );
    assert!(analysis.grid.iter().any(|g| g.noise_spread.is_some()));
}

// Electrons whose mobility scales as 1/T over holes of constant mobility (one band phonon
// limited, the other alloy or impurity limited): the ratio of mobilities changes with
// temperature, MR is no longer a function of B / rho(0) alone, and the curves fan out. The
// coldest and the warmest curves lie furthest from the others.
#[test]
fn kohler_is_violated_when_the_mobilities_scale_differently() {
    let split = |t: f64| {
        let c = 300.0 / t;
        vec![Carrier::electron(2e15, 0.5 * c), Carrier::hole(5e15, 0.1)]
    };
    for noise in [SweepNoise::NONE, noise()] {
        let curves = curves(split, noise);
        let analysis = kohler(&curves, &KohlerSettings::default()).unwrap();
        assert_eq!(analysis.holds, Some(false));
        assert!(!analysis.failures.is_empty());
        assert!(
            analysis.max_excess_spread.unwrap() > 0.1,
            "{:?}",
            analysis.max_excess_spread
        );
        assert!(
            [50.0, 300.0].contains(&analysis.most_deviating_temperature_k),
            "{}",
            analysis.most_deviating_temperature_k
        );
        for failure in &analysis.failures {
            assert!(failure.max_excess_spread > analysis.tolerance);
            assert!(failure.x_low_t_per_ohm <= failure.x_high_t_per_ohm);
        }
        // Deviations of the extremes have opposite signs: the curves fan out.
        let first = analysis.deviations[0].mean_deviation.unwrap();
        let last = analysis.deviations[3].mean_deviation.unwrap();
        assert!(first * last < 0.0, "{first} {last}");
    }
}

// Freeze-out: the mobilities keep one scattering time but the electron density falls on
// cooling, so the share of each band in the conductance changes and Kohler's rule fails.
#[test]
fn kohler_is_violated_when_a_density_changes() {
    let freezing = |t: f64| {
        let c = 300.0 / t;
        vec![
            Carrier::electron(2e15 * t / 300.0, 0.5 * c),
            Carrier::hole(5e15, 0.1 * c),
        ]
    };
    let analysis = kohler(&curves(freezing, SweepNoise::NONE), &KohlerSettings::default()).unwrap();
    assert_eq!(analysis.holds, Some(false));
    assert!(analysis.max_excess_spread.unwrap() > 0.1);
}

// Curves far noisier than the tolerance everywhere cannot show a collapse either way.
#[test]
fn kohler_noisy_curves_are_not_judged() {
    let noisy = |t: f64, rho0: f64| KohlerCurve {
        temperature_k: t,
        rho0_ohm_sq: rho0,
        points: (1..=6)
            .map(|k| {
                let field_t = 1.5 * k as f64;
                let mr = 1e-3 * (field_t / rho0).powi(2);
                KohlerInput {
                    field_t,
                    mr,
                    mr_unc: Some(0.3 * mr),
                }
            })
            .collect(),
    };
    let analysis = kohler(&[noisy(10.0, 0.01), noisy(20.0, 0.012)], &KohlerSettings::default()).unwrap();
    assert_eq!(analysis.holds, None);
    assert!(analysis.grid.iter().all(|g| g.collapsed.is_none()));
    assert!(
        analysis.warnings.iter().any(|w| w.contains("unknown")),
        "{:?}",
        analysis.warnings
    );
}

#[test]
fn kohler_refuses_bad_input_with_clear_errors() {
    let good = power_law_curve(10.0, 100.0, 50.0, 2.0);
    let settings = KohlerSettings::default();
    let error = kohler(std::slice::from_ref(&good), &settings).unwrap_err();
    assert_eq!(error, KohlerError::TooFewCurves { curves: 1 });
    assert!(error.to_string().contains("two or more temperatures"));

    let mut zero_rho = power_law_curve(20.0, 100.0, 50.0, 2.0);
    zero_rho.rho0_ohm_sq = 0.0;
    let error = kohler(&[good.clone(), zero_rho], &settings).unwrap_err();
    assert!(matches!(
        error,
        KohlerError::InvalidCurve {
            curve: 1,
            what: "rho0_ohm_sq",
            ..
        }
    ));

    let mut nan = power_law_curve(20.0, 100.0, 50.0, 2.0);
    nan.points[3].mr = f64::NAN;
    assert!(matches!(
        kohler(&[good.clone(), nan], &settings),
        Err(KohlerError::InvalidPoint {
            curve: 1,
            index: 3,
            column: "mr",
            ..
        })
    ));

    // x ranges 0.001..0.09 and 1..90 T/ohm do not meet.
    let far = power_law_curve(20.0, 0.1, 50.0, 2.0);
    let error = kohler(&[good.clone(), far], &settings).unwrap_err();
    assert!(matches!(error, KohlerError::NoOverlap { .. }));
    assert!(
        error.to_string().contains("measure to fields where the curves overlap"),
        "{error}"
    );

    // One carrier has no MR to plot.
    let flat = power_law_curve(20.0, 100.0, 0.0, 2.0);
    let error = kohler(&[good.clone(), flat], &settings).unwrap_err();
    assert_eq!(error, KohlerError::TooFewUsableCurves { usable: 1 });
    assert!(!error.to_string().ends_with('.'));

    let mut mixed = power_law_curve(20.0, 100.0, 50.0, 2.0);
    mixed.points[5].mr_unc = Some(1e-3);
    assert_eq!(
        kohler(&[good.clone(), mixed], &settings),
        Err(KohlerError::MixedUncertainties { curve: 1 })
    );

    let bad = KohlerSettings {
        tolerance: -0.1,
        ..Default::default()
    };
    assert!(matches!(
        kohler(&[good.clone(), good.clone()], &bad),
        Err(KohlerError::InvalidSetting { name: "tolerance", .. })
    ));
}

/// The same sample measured with relative noise only and given without uncertainties, as
/// a lab's table often is: at the lowest fields MR is below its noise, and judged as exact
/// those points failed the collapse (spreads of 0.2 to 0.75 in ln MR at 1e-5 and 1e-4
/// relative noise). With each point's uncertainty estimated from the curve's scatter the
/// rule holds, and a violating sample still fails.
#[test]
fn kohler_estimates_missing_uncertainties_from_the_scatter() {
    let strip = |mut curves: Vec<KohlerCurve>| {
        for curve in &mut curves {
            for point in &mut curve.points {
                point.mr_unc = None;
            }
        }
        curves
    };
    for relative in [1e-5, 1e-4] {
        let noise = SweepNoise {
            absolute_ohm: 0.0,
            relative,
        };
        let stated = curves(common_scattering_time, noise);
        let analysis = kohler(&strip(stated.clone()), &KohlerSettings::default()).unwrap();
        assert_eq!(analysis.holds, Some(true), "{relative}: {:?}", analysis.failures);
        assert_eq!(analysis.estimated_temperatures_k, TEMPERATURES.to_vec());
        assert!(
            analysis
                .warnings
                .iter()
                .any(|w| w.contains("estimated from the scatter")),
            "{:?}",
            analysis.warnings
        );
        // The estimate follows the noise put in: rho_xx noise relative x rho at +B and at
        // -B, averaged by the symmetrization, gives MR = rho(B) / rho(0) - 1 a point-to-point
        // noise of relative (1 + MR) / sqrt(2) (propagation of a mean and a ratio, JCGM
        // 100:2008 5.1.2); rho(0)'s own error is common to the curve and not in its scatter.
        // Each point within the scatter of a median of 41 values (a relative standard
        // deviation near 0.2, and about 3,000 points: 3.5 of them either side).
        let mut ratios = Vec::new();
        for point in analysis.points.iter().filter(|p| p.field_t > 1.0) {
            let expected = relative * (1.0 + point.mr) / 2f64.sqrt();
            ratios.push(point.mr_unc.unwrap() / expected);
        }
        ratios.sort_by(f64::total_cmp);
        let median = ratios[ratios.len() / 2];
        assert!(
            (median - 1.0).abs() < 0.1,
            "{relative}: median estimate / expected {median}"
        );
        assert!(
            ratios[0] > 0.3 && ratios[ratios.len() - 1] < 2.0,
            "{relative}: estimate / expected from {} to {}",
            ratios[0],
            ratios[ratios.len() - 1]
        );
        let split = |t: f64| vec![Carrier::electron(2e15, 0.5 * 300.0 / t), Carrier::hole(5e15, 0.1)];
        let violating = kohler(&strip(curves(split, noise)), &KohlerSettings::default()).unwrap();
        assert_eq!(violating.holds, Some(false), "{relative}");
    }
    // A computed curve has no scatter (its third differences are 6e-9 of MR at the median,
    // from its curvature and rounding) and stays without uncertainties.
    let exact = kohler(
        &strip(curves(common_scattering_time, SweepNoise::NONE)),
        &KohlerSettings::default(),
    )
    .unwrap();
    assert!(exact.estimated_temperatures_k.is_empty());
    assert_eq!(exact.holds, Some(true));
}
