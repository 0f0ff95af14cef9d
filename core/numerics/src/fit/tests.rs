//! Tests of the `fit` module: published check values, recovery from forward-generated data, and bad input.

use super::*;
use crate::linalg::Matrix;
use crate::noise::Rng;

fn weighted() -> LmOptions {
    LmOptions {
        residuals_are_weighted: true,
        ..LmOptions::default()
    }
}

/// y = amplitude exp(-t / tau) + offset on t = 0, 0.1, ... 9.9.
fn decay(parameters: &[f64], t: f64) -> f64 {
    parameters[0] * (-t / parameters[1]).exp() + parameters[2]
}

const DECAY_TRUTH: [f64; 3] = [5.0, 2.0, 0.5];

fn decay_times() -> Vec<f64> {
    (0..100).map(|i| i as f64 * 0.1).collect()
}

fn noisy_decay(rng: &mut Rng, sigma: f64) -> Vec<f64> {
    decay_times()
        .iter()
        .map(|t| decay(&DECAY_TRUTH, *t) + rng.normal(0.0, sigma))
        .collect()
}

/// Residuals (model - data) / sigma of the decay.
fn fit_decay(data: &[f64], sigma: f64, options: &LmOptions) -> LmFit {
    let times = decay_times();
    let residuals = |p: &[f64], r: &mut [f64]| {
        for (i, t) in times.iter().enumerate() {
            r[i] = (decay(p, *t) - data[i]) / sigma;
        }
    };
    minimize(residuals, times.len(), &[1.0, 1.0, 0.0], &Bounds::unbounded(3), options).unwrap()
}

#[test]
fn fit_lm_recovers_an_exact_straight_line() {
    // y = 3 - 2 x exactly: the minimum is the line itself, chi-square zero to rounding.
    let x: Vec<f64> = (0..10).map(|i| i as f64 * 0.5).collect();
    let y: Vec<f64> = x.iter().map(|v| 3.0 - 2.0 * v).collect();
    let residuals = |p: &[f64], r: &mut [f64]| {
        for i in 0..x.len() {
            r[i] = p[0] + p[1] * x[i] - y[i];
        }
    };
    let fit = minimize(
        residuals,
        x.len(),
        &[0.0, 0.0],
        &Bounds::unbounded(2),
        &LmOptions::default(),
    )
    .unwrap();
    assert!(fit.converged, "{:?}", fit.termination);
    assert!((fit.parameters[0] - 3.0).abs() < 1e-12, "{:?}", fit.parameters);
    assert!((fit.parameters[1] + 2.0).abs() < 1e-12);
    assert!(fit.chi_square < 1e-24);
    assert_eq!(fit.degrees_of_freedom, 8);
    let line = fit_line(&x, &y, None).unwrap();
    assert!((line.intercept - 3.0).abs() < 1e-14 && (line.slope + 2.0).abs() < 1e-14);
    assert!((line.r_squared - 1.0).abs() < 1e-14);
    assert!(line.slope_unc < 1e-14);
}

#[test]
fn fit_line_matches_the_textbook_normal_equations() {
    // Computed from the uncentred normal equations of weighted least squares (Bevington and
    // Robinson, ch. 6): Delta = S Sxx - Sx^2, a = (Sxx Sy - Sx Sxy) / Delta,
    // b = (S Sxy - Sx Sy) / Delta, var a = Sxx / Delta, var b = S / Delta,
    // cov(a, b) = -Sx / Delta.
    let x = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
    let y = [2.1, 3.9, 6.2, 7.8, 10.1, 12.2];
    let sigma = [0.1, 0.2, 0.1, 0.3, 0.2, 0.1];
    let (mut s, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for i in 0..6 {
        let w = 1.0 / (sigma[i] * sigma[i]);
        s += w;
        sx += w * x[i];
        sy += w * y[i];
        sxx += w * x[i] * x[i];
        sxy += w * x[i] * y[i];
    }
    let delta = s * sxx - sx * sx;
    let line = fit_line(&x, &y, Some(&sigma)).unwrap();
    let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * b.abs().max(1e-3);
    assert!(close(line.intercept, (sxx * sy - sx * sxy) / delta));
    assert!(close(line.slope, (s * sxy - sx * sy) / delta));
    assert!(close(line.intercept_unc, (sxx / delta).sqrt()));
    assert!(close(line.slope_unc, (s / delta).sqrt()));
    assert!(close(line.slope_intercept_covariance, -sx / delta));
    assert_eq!(line.degrees_of_freedom, 4);
    assert!(line.weighted);
    let chi: f64 = (0..6)
        .map(|i| ((y[i] - line.intercept - line.slope * x[i]) / sigma[i]).powi(2))
        .sum();
    assert!(close(line.chi_square, chi));
    assert!(line.r_squared > 0.99 && line.r_squared < 1.0);
    // The value of the line and its uncertainty: at x_mean only the intercept-like term.
    assert!(close(line.evaluate_unc(line.x_mean), (1.0 / s).sqrt()));

    // The same weighted problem through Levenberg-Marquardt gives the same numbers.
    let residuals = |p: &[f64], r: &mut [f64]| {
        for i in 0..6 {
            r[i] = (p[0] + p[1] * x[i] - y[i]) / sigma[i];
        }
    };
    let fit = minimize(residuals, 6, &[0.0, 1.0], &Bounds::unbounded(2), &weighted()).unwrap();
    assert!((fit.parameters[0] - line.intercept).abs() < 1e-9);
    assert!((fit.parameters[1] - line.slope).abs() < 1e-9);
    assert!((fit.standard_errors[0] / line.intercept_unc - 1.0).abs() < 1e-6);
    assert!((fit.standard_errors[1] / line.slope_unc - 1.0).abs() < 1e-6);
    assert!((fit.covariance[(0, 1)] / line.slope_intercept_covariance - 1.0).abs() < 1e-6);
    assert!((fit.chi_square / line.chi_square - 1.0).abs() < 1e-9);

    // Unweighted: the standard errors scale with the scatter, sqrt(chi^2 / nu).
    let plain = fit_line(&x, &y, None).unwrap();
    let mean_x = 3.5;
    let plain_sxx: f64 = x.iter().map(|v| (v - mean_x) * (v - mean_x)).sum();
    assert!(close(plain.slope_unc, (plain.reduced_chi_square / plain_sxx).sqrt()));
    assert!(!plain.weighted);
}

#[test]
fn fit_line_refuses_bad_input() {
    assert_eq!(
        fit_line(&[1.0, 2.0], &[1.0, 2.0], None),
        Err(FitError::TooFewPoints { points: 2, required: 3 })
    );
    assert!(fit_line(&[1.0, 2.0], &[1.0, 2.0], Some(&[0.1, 0.1])).is_ok());
    assert_eq!(
        fit_line(&[2.0; 4], &[1.0, 2.0, 3.0, 4.0], None),
        Err(FitError::NoSpread)
    );
    assert!(matches!(
        fit_line(&[1.0, f64::NAN, 3.0], &[1.0, 2.0, 3.0], None),
        Err(FitError::InvalidPoint { index: 1, .. })
    ));
    assert!(matches!(
        fit_line(&[1.0, 2.0, 3.0], &[1.0, 2.0, 3.0], Some(&[0.1, 0.0, 0.1])),
        Err(FitError::InvalidPoint { index: 1, .. })
    ));
    assert!(matches!(
        fit_line(&[1.0, 2.0, 3.0], &[1.0, 2.0], None),
        Err(FitError::LengthMismatch { .. })
    ));
}

#[test]
fn fit_lm_recovers_a_noisy_exponential_decay_within_its_uncertainties() {
    let sigma = 0.05;
    let mut rng = Rng::seeded(2718);
    let data = noisy_decay(&mut rng, sigma);
    let fit = fit_decay(&data, sigma, &weighted());
    assert!(fit.converged);
    for (j, truth) in DECAY_TRUTH.iter().enumerate() {
        let pull = (fit.parameters[j] - truth) / fit.standard_errors[j];
        assert!(
            pull.abs() < 3.0,
            "parameter {j}: {} +- {}",
            fit.parameters[j],
            fit.standard_errors[j]
        );
    }
    // chi^2 / nu of 97 degrees of freedom: 1 within 3 sqrt(2 / 97) = 0.43.
    assert_eq!(fit.degrees_of_freedom, 97);
    assert!(
        (fit.reduced_chi_square - 1.0).abs() < 0.43,
        "{}",
        fit.reduced_chi_square
    );
    // Unweighted residuals (sigma not divided out) give the same parameters, and the
    // standard errors scaled by the scatter are the weighted ones times sqrt(chi^2 / nu).
    let times = decay_times();
    let plain = minimize(
        |p: &[f64], r: &mut [f64]| {
            for (i, t) in times.iter().enumerate() {
                r[i] = decay(p, *t) - data[i];
            }
        },
        100,
        &[1.0, 1.0, 0.0],
        &Bounds::unbounded(3),
        &LmOptions::default(),
    )
    .unwrap();
    for j in 0..3 {
        assert!((plain.parameters[j] - fit.parameters[j]).abs() < 1e-7 * fit.parameters[j].abs().max(1.0));
        let expected = fit.standard_errors[j] * fit.reduced_chi_square.sqrt();
        assert!((plain.standard_errors[j] / expected - 1.0).abs() < 1e-5);
    }
    let correlation = fit.correlation();
    assert!((correlation[(0, 0)] - 1.0).abs() < 1e-12);
    assert!(correlation[(1, 2)].abs() < 1.0);
}

#[test]
fn fit_lm_covariance_matches_a_monte_carlo_spread() {
    // 400 independent noisy data sets: the spread of the fitted parameters must match the
    // standard errors the fit reports. The sample standard deviation of 400 draws has a
    // relative standard error of 1/sqrt(2 * 399) = 3.5 %, so 15 % is over four of those.
    let sigma = 0.05;
    let mut rng = Rng::seeded(31415);
    let trials = 400;
    let mut values: Vec<Vec<f64>> = (0..3).map(|_| Vec::with_capacity(trials)).collect();
    let mut reported = [0.0; 3];
    for _ in 0..trials {
        let data = noisy_decay(&mut rng, sigma);
        let fit = fit_decay(&data, sigma, &weighted());
        assert!(fit.converged);
        for j in 0..3 {
            values[j].push(fit.parameters[j]);
            reported[j] += fit.standard_errors[j] / trials as f64;
        }
    }
    for j in 0..3 {
        let mean = values[j].iter().sum::<f64>() / trials as f64;
        let spread = (values[j].iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / (trials - 1) as f64).sqrt();
        assert!(
            (spread / reported[j] - 1.0).abs() < 0.15,
            "parameter {j}: spread {spread}, reported {}",
            reported[j]
        );
        // Unbiased to within the Monte-Carlo error of the mean (5 standard errors).
        assert!((mean - DECAY_TRUTH[j]).abs() < 5.0 * spread / (trials as f64).sqrt());
    }
}

fn rosenbrock(p: &[f64], r: &mut [f64]) {
    // The extended Rosenbrock function as least squares: r = 10 (x_{i+1} - x_i^2), 1 - x_i
    // (Moré, Garbow and Hillstrom, ACM TOMS 7, 17, 1981, problem 1 and its chained form).
    for i in 0..p.len() - 1 {
        r[2 * i] = 10.0 * (p[i + 1] - p[i] * p[i]);
        r[2 * i + 1] = 1.0 - p[i];
    }
}

#[test]
fn fit_lm_follows_the_rosenbrock_valley_from_a_bad_start() {
    // The classic start (-1.2, 1): the valley bends round to the minimum at (1, 1).
    let fit = minimize(rosenbrock, 2, &[-1.2, 1.0], &Bounds::unbounded(2), &weighted()).unwrap();
    assert!(fit.converged, "{:?}", fit.termination);
    assert!((fit.parameters[0] - 1.0).abs() < 1e-8 && (fit.parameters[1] - 1.0).abs() < 1e-8);
    assert!(fit.chi_square < 1e-20);
    assert_eq!(fit.degrees_of_freedom, 0);
    assert!(fit.reduced_chi_square.is_nan());
    // Chained in four dimensions, six residuals, from far away.
    let fit = minimize(
        rosenbrock,
        6,
        &[-1.2, 1.0, -1.2, 1.0],
        &Bounds::unbounded(4),
        &weighted(),
    )
    .unwrap();
    assert!(fit.converged);
    for value in &fit.parameters {
        assert!((value - 1.0).abs() < 1e-8, "{:?}", fit.parameters);
    }
    // With the analytic Jacobian the same minimum.
    let jacobian = |p: &[f64], jac: &mut Matrix| {
        jac[(0, 0)] = -20.0 * p[0];
        jac[(0, 1)] = 10.0;
        jac[(1, 0)] = -1.0;
    };
    let fit = LeastSquares::new(2, rosenbrock)
        .with_jacobian(jacobian)
        .minimize(&[-1.2, 1.0], &weighted())
        .unwrap();
    assert!(fit.converged);
    assert!((fit.parameters[0] - 1.0).abs() < 1e-8 && (fit.parameters[1] - 1.0).abs() < 1e-8);
    // The covariance (J^T J)^-1 at (1, 1), J = [[-20, 10], [-1, 0]]: J^-1 = [[0, -1],
    // [0.1, -2]], so (J^T J)^-1 = J^-1 J^-T = [[1, 2], [2, 4.01]] (computed by hand).
    assert!((fit.covariance[(0, 0)] - 1.0).abs() < 1e-6);
    assert!((fit.covariance[(0, 1)] - 2.0).abs() < 1e-6);
    assert!((fit.covariance[(1, 1)] - 4.01).abs() < 1e-6);
}

#[test]
fn fit_lm_stops_at_an_active_bound() {
    // y = 1 + 2 x exactly, but the slope may not exceed 1.5: the constrained minimum has
    // slope 1.5 and the intercept that is best for that slope, mean(y - 1.5 x).
    let x: Vec<f64> = (0..8).map(|i| i as f64).collect();
    let y: Vec<f64> = x.iter().map(|v| 1.0 + 2.0 * v).collect();
    let residuals = |p: &[f64], r: &mut [f64]| {
        for i in 0..x.len() {
            r[i] = p[0] + p[1] * x[i] - y[i];
        }
    };
    let bounds = Bounds::new(vec![f64::NEG_INFINITY, 0.0], vec![f64::INFINITY, 1.5]).unwrap();
    let fit = minimize(residuals, 8, &[0.0, 0.5], &bounds, &LmOptions::default()).unwrap();
    assert!(fit.converged, "{:?}", fit.termination);
    assert_eq!(fit.parameters[1], 1.5);
    assert_eq!(fit.at_bound, vec![false, true]);
    let expected_intercept = x.iter().zip(&y).map(|(a, b)| b - 1.5 * a).sum::<f64>() / 8.0;
    assert!((fit.parameters[0] - expected_intercept).abs() < 1e-10);
    assert!(fit.standard_errors[1].is_nan());
    // The intercept's error is that of a one-parameter fit: s / sqrt(8), s^2 = chi^2 / nu.
    let expected_error = (fit.chi_square / fit.degrees_of_freedom as f64 / 8.0).sqrt();
    assert!((fit.standard_errors[0] / expected_error - 1.0).abs() < 1e-6);
    assert_eq!(fit.covariance[(1, 1)], 0.0);
}

#[test]
fn fit_lm_never_evaluates_outside_the_box() {
    // The model is undefined below p = 0.01 (NaN there); the data want p = 0.001, so the
    // solution sits on the bound and every difference stencil must stay inside.
    let data: Vec<f64> = (1..=6).map(|i| (0.001f64).ln() + 0.1 * i as f64).collect();
    let residuals = |p: &[f64], r: &mut [f64]| {
        for (i, value) in data.iter().enumerate() {
            r[i] = if p[0] < 0.01 {
                f64::NAN
            } else {
                p[0].ln() + 0.1 * (i + 1) as f64 - value
            };
        }
    };
    let bounds = Bounds::new(vec![0.01], vec![10.0]).unwrap();
    let fit = minimize(residuals, 6, &[5.0], &bounds, &LmOptions::default()).unwrap();
    assert!(fit.converged);
    assert_eq!(fit.parameters[0], 0.01);
    assert_eq!(fit.at_bound, vec![true]);
    // A start outside the box is clamped into it.
    let fit = minimize(residuals, 6, &[-3.0], &bounds, &LmOptions::default()).unwrap();
    assert_eq!(fit.parameters[0], 0.01);
}

#[test]
fn fit_lm_holds_a_parameter_fixed_by_equal_bounds() {
    let times = decay_times();
    let data: Vec<f64> = times.iter().map(|t| decay(&DECAY_TRUTH, *t)).collect();
    let residuals = |p: &[f64], r: &mut [f64]| {
        for (i, t) in times.iter().enumerate() {
            r[i] = decay(p, *t) - data[i];
        }
    };
    let bounds = Bounds::new(
        vec![f64::NEG_INFINITY, f64::NEG_INFINITY, 0.5],
        vec![f64::INFINITY, f64::INFINITY, 0.5],
    )
    .unwrap();
    let fit = minimize(residuals, 100, &[1.0, 1.0, 0.5], &bounds, &LmOptions::default()).unwrap();
    assert!(fit.converged);
    assert_eq!(fit.parameters[2], 0.5);
    assert!((fit.parameters[0] - 5.0).abs() < 1e-9 && (fit.parameters[1] - 2.0).abs() < 1e-9);
    assert_eq!(fit.degrees_of_freedom, 98);
    assert_eq!(fit.standard_errors[2], 0.0);
}

#[test]
fn fit_lm_analytic_and_numerical_jacobians_agree() {
    let sigma = 0.05;
    let mut rng = Rng::seeded(99);
    let data = noisy_decay(&mut rng, sigma);
    let times = decay_times();
    let residuals = |p: &[f64], r: &mut [f64]| {
        for (i, t) in times.iter().enumerate() {
            r[i] = (decay(p, *t) - data[i]) / sigma;
        }
    };
    let jacobian = |p: &[f64], jac: &mut Matrix| {
        for (i, t) in times.iter().enumerate() {
            let e = (-t / p[1]).exp();
            jac[(i, 0)] = e / sigma;
            jac[(i, 1)] = p[0] * e * t / (p[1] * p[1]) / sigma;
            jac[(i, 2)] = 1.0 / sigma;
        }
    };
    let numerical = LeastSquares::new(100, residuals)
        .minimize(&[1.0, 1.0, 0.0], &weighted())
        .unwrap();
    let analytic = LeastSquares::new(100, residuals)
        .with_jacobian(jacobian)
        .minimize(&[1.0, 1.0, 0.0], &weighted())
        .unwrap();
    for j in 0..3 {
        assert!((numerical.parameters[j] - analytic.parameters[j]).abs() < 1e-8);
        assert!((numerical.standard_errors[j] / analytic.standard_errors[j] - 1.0).abs() < 1e-6);
    }
    assert!(analytic.evaluations < numerical.evaluations);
}

#[test]
fn fit_multi_start_keeps_the_global_minimum_and_counts_agreement() {
    // y = sin(omega t) on t in [0, 10] with omega = 3: the cost in omega has many local
    // minima, so a start far from 3 ends in one of them.
    let times: Vec<f64> = (0..200).map(|i| i as f64 * 0.05).collect();
    let data: Vec<f64> = times.iter().map(|t| (3.0 * t).sin()).collect();
    let problem = LeastSquares::new(times.len(), |p: &[f64], r: &mut [f64]| {
        for (i, t) in times.iter().enumerate() {
            r[i] = (p[0] * t).sin() - data[i];
        }
    });
    let starts = vec![vec![0.7], vec![1.6], vec![2.9], vec![3.1], vec![5.0]];
    let single = problem.minimize(&[0.7], &LmOptions::default()).unwrap();
    assert!((single.parameters[0] - 3.0).abs() > 0.1, "{:?}", single.parameters);
    let fit = problem
        .minimize_multi_start(&starts, &LmOptions::default(), &SameMinimum::default())
        .unwrap();
    assert!((fit.best.parameters[0] - 3.0).abs() < 1e-10);
    assert!(fit.best_start == 2 || fit.best_start == 3);
    assert_eq!(fit.outcomes.len(), 5);
    assert!(fit.same_minimum >= 2 && fit.same_minimum < 5, "{fit:?}");
    assert!(fit.converged >= fit.same_minimum);
    let agreeing = fit
        .outcomes
        .iter()
        .filter(|outcome| {
            outcome
                .result
                .as_ref()
                .is_ok_and(|summary| summary.same_minimum_as_best)
        })
        .count();
    assert_eq!(agreeing, fit.same_minimum);
}

#[test]
fn fit_refuses_bad_problems_with_clear_errors() {
    let line = |p: &[f64], r: &mut [f64]| {
        for (i, value) in r.iter_mut().enumerate() {
            *value = p[0] + p[1] * i as f64 - 2.0 * i as f64;
        }
    };
    let options = LmOptions::default();
    // More parameters than residuals (and, unweighted, as many).
    assert_eq!(
        minimize(line, 1, &[0.0, 0.0], &Bounds::unbounded(2), &options),
        Err(FitError::TooFewResiduals {
            residuals: 1,
            parameters: 2
        })
    );
    assert!(matches!(
        minimize(line, 2, &[0.0, 0.0], &Bounds::unbounded(2), &options),
        Err(FitError::TooFewResiduals { .. })
    ));
    assert!(minimize(line, 2, &[0.0, 0.0], &Bounds::unbounded(2), &weighted()).is_ok());
    assert_eq!(
        minimize(line, 5, &[], &Bounds::unbounded(0), &options),
        Err(FitError::NoParameters)
    );
    assert!(matches!(
        minimize(line, 5, &[0.0, f64::INFINITY], &Bounds::unbounded(2), &options),
        Err(FitError::NonFiniteStart { index: 1, .. })
    ));
    assert!(matches!(
        minimize(line, 5, &[0.0, 0.0], &Bounds::unbounded(3), &options),
        Err(FitError::LengthMismatch { .. })
    ));
    assert!(matches!(
        Bounds::new(vec![1.0, 0.0], vec![0.0, 1.0]),
        Err(FitError::InvalidBounds { index: 0, .. })
    ));
    assert!(matches!(
        Bounds::new(vec![f64::NAN], vec![1.0]),
        Err(FitError::InvalidBounds { index: 0, .. })
    ));
    // Non-finite residuals at the start.
    let broken = |p: &[f64], r: &mut [f64]| {
        for (i, value) in r.iter_mut().enumerate() {
            *value = if i == 3 { (p[0] - 10.0).ln() } else { p[0] };
        }
    };
    assert!(matches!(
        minimize(broken, 5, &[1.0], &Bounds::unbounded(1), &options),
        Err(FitError::NonFiniteResidual { index: 3, .. })
    ));
    // Two parameters that only enter as their sum: singular, both named.
    let sum_only = |p: &[f64], r: &mut [f64]| {
        for (i, value) in r.iter_mut().enumerate() {
            *value = p[0] + p[1] - 1.0 - 0.01 * i as f64;
        }
    };
    assert_eq!(
        minimize(sum_only, 5, &[0.0, 0.0], &Bounds::unbounded(2), &options),
        Err(FitError::Singular { parameters: vec![0, 1] })
    );
    // A bad option.
    let bad = LmOptions {
        gradient_tolerance: -1.0,
        ..LmOptions::default()
    };
    assert!(matches!(
        minimize(line, 5, &[0.0, 0.0], &Bounds::unbounded(2), &bad),
        Err(FitError::InvalidOption { .. })
    ));
    // One iteration is not enough for Rosenbrock: not converged, and a multi-start of such
    // runs reports it.
    let short = LmOptions {
        max_iterations: 1,
        ..weighted()
    };
    let fit = minimize(rosenbrock, 2, &[-1.2, 1.0], &Bounds::unbounded(2), &short).unwrap();
    assert!(!fit.converged);
    assert_eq!(fit.termination, Termination::MaxIterations);
    let problem = LeastSquares::new(2, rosenbrock);
    assert!(matches!(
        problem.minimize_multi_start(&[vec![-1.2, 1.0], vec![-2.0, 2.0]], &short, &SameMinimum::default()),
        Err(FitError::NotConverged { starts: 2, .. })
    ));
    assert_eq!(
        problem.minimize_multi_start(&[], &short, &SameMinimum::default()),
        Err(FitError::NoStarts)
    );
    // A multi-start whose best minimum is singular says so rather than falling back to
    // another run.
    let sum_problem = LeastSquares::new(5, sum_only);
    assert_eq!(
        sum_problem.minimize_multi_start(&[vec![0.0, 0.0], vec![3.0, -1.0]], &options, &SameMinimum::default()),
        Err(FitError::Singular { parameters: vec![0, 1] })
    );
    // Every error message says what to change and ends without a period.
    for error in [
        FitError::NoParameters,
        FitError::Singular { parameters: vec![1] },
        FitError::NoSpread,
        FitError::TooFewPoints { points: 1, required: 3 },
    ] {
        let message = error.to_string();
        assert!(!message.ends_with('.'), "{message}");
        assert!(message.contains("give") || message.contains("fix") || message.contains("add"));
    }
}

// The parallel multi-start runs the same runs and chooses among them in the same order, so
// its result equals the serial one to the last bit, failed and unconverged starts included.
#[test]
fn parallel_multi_start_equals_the_serial_one_bit_for_bit() {
    let times: Vec<f64> = (0..200).map(|i| i as f64 * 0.05).collect();
    let data: Vec<f64> = times.iter().map(|t| (3.0 * t).sin()).collect();
    let residuals = |p: &[f64], r: &mut [f64]| {
        for (i, t) in times.iter().enumerate() {
            r[i] = (p[0] * t).sin() - data[i];
        }
    };
    let starts = vec![vec![0.7], vec![1.6], vec![2.9], vec![f64::NAN], vec![3.1], vec![5.0]];
    for options in [
        LmOptions::default(),
        LmOptions {
            max_iterations: 3,
            ..LmOptions::default()
        },
    ] {
        let serial =
            LeastSquares::new(times.len(), residuals).minimize_multi_start(&starts, &options, &SameMinimum::default());
        let parallel = minimize_multi_start_parallel(
            || LeastSquares::new(times.len(), residuals),
            &starts,
            &options,
            &SameMinimum::default(),
        );
        assert_eq!(format!("{serial:?}"), format!("{parallel:?}"));
    }
    assert!(matches!(
        minimize_multi_start_parallel(
            || LeastSquares::new(times.len(), residuals),
            &[],
            &LmOptions::default(),
            &SameMinimum::default()
        ),
        Err(FitError::NoStarts)
    ));
}

// A problem declared finite in its box leaves the Jacobian at the end of each run to the run
// that is chosen: the same fit to the last bit (the chosen run's evaluations included), with
// one Jacobian per other start fewer.
#[test]
fn residuals_finite_in_bounds_change_only_the_work() {
    let times: Vec<f64> = (0..200).map(|i| i as f64 * 0.05).collect();
    let data: Vec<f64> = times.iter().map(|t| 2.0 * (-0.3 * t).exp() + 0.5).collect();
    let evaluations = std::cell::Cell::new(0usize);
    let residuals = |p: &[f64], r: &mut [f64]| {
        evaluations.set(evaluations.get() + 1);
        for (i, t) in times.iter().enumerate() {
            r[i] = p[0] * (-p[1] * t).exp() + p[2] - data[i];
        }
    };
    let bounds = Bounds::new(vec![0.0, 0.01, -10.0], vec![10.0, 5.0, 10.0]).unwrap();
    let starts = vec![
        vec![1.0, 1.0, 0.0],
        vec![5.0, 0.05, 1.0],
        vec![0.5, 3.0, -2.0],
        vec![3.0, 0.2, 2.0],
    ];
    let options = LmOptions::default();
    let mut fits = Vec::new();
    let mut work = Vec::new();
    for declared in [false, true] {
        evaluations.set(0);
        let mut problem = LeastSquares::new(times.len(), residuals).with_bounds(bounds.clone());
        if declared {
            problem = problem.with_residuals_finite_in_bounds();
        }
        let single = problem.minimize(&starts[0], &options).unwrap();
        let multi = problem
            .minimize_multi_start(&starts, &options, &SameMinimum::default())
            .unwrap();
        fits.push(format!("{single:?} {multi:?}"));
        work.push(evaluations.get());
    }
    assert_eq!(fits[0], fits[1]);
    assert!(work[1] < work[0], "{work:?}");
}
