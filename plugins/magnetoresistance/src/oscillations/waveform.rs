//! Least-squares pieces of the oscillation analysis: linear fits with covariance, the
//! in-phase amplitude of a window, the damped-cosine refinement of the frequencies at one
//! temperature, and the Lifshitz-Kosevich waveform fitted across temperatures.

use std::cell::RefCell;
use std::f64::consts::PI;
use std::rc::Rc;

use mobilis_numerics::fit::{
    minimize_multi_start_parallel, Bounds, FitError, LeastSquares, LmFit, LmOptions, SameMinimum,
};
use mobilis_numerics::linalg::{Matrix, Svd};
use mobilis_physics::forward::oscillations::{thermal_damping, thermal_damping_log_derivative, LK_FIELD_PER_KELVIN};

/// Fewest points a window's linear fit may use (four coefficients and a scatter).
pub const MIN_WINDOW_FIT_POINTS: usize = 8;

/// Relative singular-value floor of the linear fits.
const RANK_TOLERANCE: f64 = 1e-12;

/// Coefficients of a linear least-squares fit, their covariance (scaled by the residual
/// variance) and that variance.
#[derive(Debug, Clone)]
pub(super) struct LinearFit {
    pub coefficients: Vec<f64>,
    pub covariance: Matrix,
}

/// y = design c by least squares through the SVD; None when there are no more rows than
/// columns or the columns are dependent.
pub(super) fn linear_least_squares(design: &Matrix, y: &[f64]) -> Option<LinearFit> {
    let (rows, cols) = (design.rows(), design.cols());
    if rows <= cols {
        return None;
    }
    let svd = Svd::new(design).ok()?;
    if svd.rank(RANK_TOLERANCE) < cols {
        return None;
    }
    let coefficients = svd.solve_least_squares(y, RANK_TOLERANCE);
    let fitted = design.mul_vec(&coefficients);
    let rss: f64 = fitted.iter().zip(y).map(|(f, v)| (f - v) * (f - v)).sum();
    let variance = rss / (rows - cols) as f64;
    let v = svd.v();
    let s = svd.singular_values();
    let covariance = Matrix::from_fn(cols, cols, |i, j| {
        variance * (0..cols).map(|k| v[(i, k)] * v[(j, k)] / (s[k] * s[k])).sum::<f64>()
    });
    Some(LinearFit {
        coefficients,
        covariance,
    })
}

/// The amplitude of the component cos(2 pi F x + phase) in a window of 1/B.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct InPhase {
    /// Coefficient of cos(2 pi F x + phase), ohm per square (signed).
    pub amplitude: f64,
    pub amplitude_unc: f64,
    /// Coefficient of sin(2 pi F x + phase): near zero when the phase is right.
    pub quadrature: f64,
    /// The 1/B the amplitude refers to: `normalize_at` when given, else the mean 1/B of the
    /// points used.
    pub mean_inverse_field: f64,
    pub points: usize,
}

impl InPhase {
    /// The phase at which this window's component is all in phase:
    /// a cos(t) + b sin(t) = A cos(t - atan2(b, a)).
    pub fn phase_correction(&self) -> f64 {
        self.quadrature.atan2(self.amplitude)
    }
}

/// The expected envelope g of the oscillation across a window, for [`in_phase_amplitude`].
pub(super) trait WindowEnvelope {
    /// g(x_i) / g(reference) for each x_i of `x`, into `shape`.
    fn relative_to(&self, reference: f64, x: &[f64], shape: &mut [f64]);
}

/// An envelope given point by point as g(x, x_ref) = g(x) / g(x_ref).
impl<F: Fn(f64, f64) -> f64> WindowEnvelope for F {
    fn relative_to(&self, reference: f64, x: &[f64], shape: &mut [f64]) {
        for (value, xi) in shape.iter_mut().zip(x) {
            *value = self(*xi, reference);
        }
    }
}

/// Fits a g(x) cos(theta) + b g(x) sin(theta) + c + d (x - x_mid) with theta = 2 pi F x +
/// phase to the points with x in `range` (the constant and the slope take up what the
/// background left). g(x) / g(x_ref) is the expected envelope relative to its value at
/// x_ref (1 for none), so that a is the amplitude at x_ref even when the damping changes
/// across the window. x_ref is `normalize_at` when given, else the mean 1/B of this sweep's
/// points in the window: sweeps compared with each other (the narrow-window mass) must share
/// one x_ref, or differently sampled sweeps refer their amplitudes to different fields,
/// which biases the mass. None with fewer than [`MIN_WINDOW_FIT_POINTS`] points or a
/// degenerate design.
pub(super) fn in_phase_amplitude(
    x: &[f64],
    y: &[f64],
    range: (f64, f64),
    frequency: f64,
    phase: f64,
    envelope: Option<&dyn WindowEnvelope>,
    normalize_at: Option<f64>,
) -> Option<InPhase> {
    // x is ascending: the window is one contiguous run, found by bisection, so that many
    // windows over a long sweep cost their own points only.
    let first = x.partition_point(|v| *v < range.0);
    let end = x.partition_point(|v| *v <= range.1).max(first);
    let (xs, values) = (&x[first..end], &y[first..end]);
    if xs.len() < MIN_WINDOW_FIT_POINTS {
        return None;
    }
    let middle = 0.5 * (range.0 + range.1);
    let half = 0.5 * (range.1 - range.0);
    let own_mean = xs.iter().copied().sum::<f64>() / xs.len() as f64;
    let mean = normalize_at.unwrap_or(own_mean);
    let mut shape = vec![1.0; xs.len()];
    if let Some(envelope) = envelope {
        envelope.relative_to(mean, xs, &mut shape);
    }
    let theta = |row: usize| 2.0 * PI * frequency * xs[row] + phase;
    let design = Matrix::from_fn(xs.len(), 4, |row, col| match col {
        0 => shape[row] * theta(row).cos(),
        1 => shape[row] * theta(row).sin(),
        2 => 1.0,
        _ => (xs[row] - middle) / half,
    });
    let fit = linear_least_squares(&design, values)?;
    Some(InPhase {
        amplitude: fit.coefficients[0],
        amplitude_unc: fit.covariance[(0, 0)].max(0.0).sqrt(),
        quadrature: fit.coefficients[1],
        mean_inverse_field: mean,
        points: xs.len(),
    })
}

/// Wraps an angle into (-pi, pi].
pub(super) fn wrap_phase(angle: f64) -> f64 {
    let wrapped = angle.rem_euclid(2.0 * PI);
    if wrapped > PI {
        wrapped - 2.0 * PI
    } else {
        wrapped
    }
}

/// The waveform fit starts from the narrow-window mass, and from it halved and doubled.
pub(super) const WAVEFORM_MASS_FACTORS: [f64; 3] = [1.0, 0.5, 2.0];

/// One sweep as the nonlinear fits see it.
#[derive(Debug, Clone, Copy)]
pub(super) struct FitSweep<'a> {
    /// 1/B, ascending.
    pub x: &'a [f64],
    /// What the projected model is compared with (`Prepared::fit_target`).
    pub target: &'a [f64],
    pub temperature_k: f64,
    /// The polynomial background's orthonormal basis: the model is projected off it, so the
    /// background is fitted jointly (variable projection).
    pub projection: Option<&'a [Vec<f64>]>,
}

impl FitSweep<'_> {
    fn linear_parameters(&self) -> usize {
        self.projection.map_or(0, |basis| basis.len())
    }
}

/// A model's per-point factors (its exp, sinh and cos values) at the parameters of its last
/// residual evaluation. Levenberg-Marquardt asks for the Jacobian where it last evaluated
/// the residuals (at the start, and after every accepted step), and there the Jacobian
/// reuses them instead of computing them again: the same numbers for a fraction of the
/// calls of the mathematical library.
#[derive(Debug)]
struct HeldFactors<T> {
    parameters: Vec<f64>,
    factors: Vec<T>,
}

impl<T> Default for HeldFactors<T> {
    fn default() -> Self {
        HeldFactors {
            parameters: Vec::new(),
            factors: Vec::new(),
        }
    }
}

impl<T: Copy + Default> HeldFactors<T> {
    /// The `len` factors to be filled for the parameters `p`.
    fn hold(&mut self, p: &[f64], len: usize) -> &mut [T] {
        self.parameters.clear();
        self.parameters.extend_from_slice(p);
        self.factors.resize(len, T::default());
        &mut self.factors
    }

    /// The factors held for `p` (the same parameters bit for bit), else None.
    fn at(&self, p: &[f64]) -> Option<&[T]> {
        let same =
            self.parameters.len() == p.len() && self.parameters.iter().zip(p).all(|(a, b)| a.to_bits() == b.to_bits());
        same.then_some(&self.factors[..])
    }
}

/// Residuals (I - P) model - target of every sweep, written consecutively.
fn projected_residuals(sweeps: &[FitSweep], mut model: impl FnMut(usize, usize) -> f64, r: &mut [f64]) {
    let mut offset = 0;
    for (s, sweep) in sweeps.iter().enumerate() {
        let n = sweep.x.len();
        let block = &mut r[offset..offset + n];
        for (i, value) in block.iter_mut().enumerate() {
            *value = model(s, i);
        }
        if let Some(basis) = sweep.projection {
            super::prepare::project_out(basis, block);
        }
        for (value, target) in block.iter_mut().zip(sweep.target) {
            *value -= target;
        }
        offset += n;
    }
}

/// The Jacobian of the projected residuals: `derivatives(s, i, row)` writes the derivatives
/// of the model at point i of sweep s with respect to every parameter into `row` (the
/// Jacobian's row of that point); each sweep's block of every column is then projected off
/// the sweep's polynomials, as the residuals are (in place, all columns at once:
/// `project_out_rows`).
fn projected_jacobian(
    sweeps: &[FitSweep],
    parameters: usize,
    mut derivatives: impl FnMut(usize, usize, &mut [f64]),
    jacobian: &mut Matrix,
) {
    debug_assert_eq!(jacobian.cols(), parameters);
    let mut offset = 0;
    for (s, sweep) in sweeps.iter().enumerate() {
        let n = sweep.x.len();
        for i in 0..n {
            derivatives(s, i, jacobian.row_mut(offset + i));
        }
        if let Some(basis) = sweep.projection {
            let block = &mut jacobian.as_mut_slice()[offset * parameters..(offset + n) * parameters];
            super::prepare::project_out_rows(basis, block, parameters);
        }
        offset += n;
    }
}

/// The first row of each sweep's block in the stacked residuals.
fn sweep_offsets(sweeps: &[FitSweep]) -> Vec<usize> {
    sweeps
        .iter()
        .scan(0, |offset, sweep| {
            let first = *offset;
            *offset += sweep.x.len();
            Some(first)
        })
        .collect()
}

/// The factor that turns standard errors scaled by chi^2 / (m - n) into ones scaled by
/// chi^2 / (m - n - L), L the linear background parameters projected out (their degrees of
/// freedom are spent too).
fn projection_correction(residuals: usize, parameters: usize, linear: usize) -> f64 {
    let free = residuals.saturating_sub(parameters);
    let remaining = free.saturating_sub(linear);
    if remaining == 0 {
        f64::NAN
    } else {
        (free as f64 / remaining as f64).sqrt()
    }
}

/// One component of the damped-cosine refinement at the reference temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct RefinedComponent {
    pub frequency_t: f64,
    pub frequency_unc_t: Option<f64>,
    /// Envelope at the centre of the 1/B window, ohm per square.
    pub amplitude_ohm_sq: f64,
    /// lambda of exp(-lambda (x - x_c)), T.
    pub decay_t: f64,
    /// phi of cos(2 pi F / B + phi), rad, in (-pi, pi].
    pub phase_rad: f64,
    pub phase_unc_rad: Option<f64>,
}

/// The factors of one damped cosine at one point: the decay and the cosine.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct DampedFactors {
    decay: f64,
    cosine: f64,
}

/// The factors of component `q` = [A, lambda, F, psi] at d = x - x_c.
#[inline]
fn damped_factors(q: &[f64], d: f64) -> DampedFactors {
    DampedFactors {
        decay: (-q[1] * d).exp(),
        cosine: (2.0 * PI * q[2] * d + q[3]).cos(),
    }
}

/// The derivatives of component `q`'s term with respect to [A, lambda, F, psi] into `out`.
#[inline]
fn damped_term_derivatives(q: &[f64], d: f64, factors: DampedFactors, out: &mut [f64]) {
    let DampedFactors { decay, cosine } = factors;
    let envelope = q[0] * decay;
    let sine = (2.0 * PI * q[2] * d + q[3]).sin();
    out[0] = decay * cosine;
    out[1] = -d * envelope * cosine;
    out[2] = -2.0 * PI * d * envelope * sine;
    out[3] = -envelope * sine;
}

/// sum_k A_k exp(-lambda_k (x - x_c)) cos(2 pi F_k (x - x_c) + psi_k) with parameters
/// [A, lambda, F, psi] per component.
fn damped_cosines(p: &[f64], x: f64, centre: f64) -> f64 {
    let d = x - centre;
    p.chunks_exact(4)
        .map(|q| {
            let factors = damped_factors(q, d);
            q[0] * factors.decay * factors.cosine
        })
        .sum()
}

/// The derivatives of [`damped_cosines`] with respect to [A, lambda, F, psi] per component.
#[cfg(test)]
fn damped_cosines_derivatives(p: &[f64], x: f64, centre: f64, row: &mut [f64]) {
    let d = x - centre;
    for (q, out) in p.chunks_exact(4).zip(row.chunks_exact_mut(4)) {
        damped_term_derivatives(q, d, damped_factors(q, d), out);
    }
}

/// The refined components and their model at the sweep's points (without the background).
pub(super) struct Refinement {
    pub components: Vec<RefinedComponent>,
    pub model: Vec<f64>,
}

/// Fits sum_k A_k exp(-lambda_k (x - x_c)) cos(2 pi F_k (x - x_c) + psi_k) to one sweep's
/// oscillation, from the FFT frequencies, jointly with a polynomial background when there
/// is one. Phases are fitted at the window centre x_c, where they are nearly uncorrelated
/// with the frequencies, and reported at 1/B = 0.
pub(super) fn refine_components(
    sweep: &FitSweep,
    frequencies: &[f64],
    centre: f64,
    span: f64,
) -> Result<Refinement, FitError> {
    let count = frequencies.len();
    let (x, y) = (sweep.x, sweep.target);
    // Linear starting amplitudes and phases at the FFT frequencies.
    let design = Matrix::from_fn(x.len(), 2 * count + 1, |row, col| {
        if col == 2 * count {
            return 1.0;
        }
        let theta = 2.0 * PI * frequencies[col / 2] * (x[row] - centre);
        if col % 2 == 0 {
            theta.cos()
        } else {
            theta.sin()
        }
    });
    let linear = linear_least_squares(&design, y);
    let scale = y.iter().fold(0.0f64, |acc, v| acc.max(v.abs())).max(f64::MIN_POSITIVE);
    let mut base = Vec::with_capacity(4 * count);
    for (k, frequency) in frequencies.iter().enumerate() {
        let (amplitude, psi) = match &linear {
            Some(fit) => {
                let (a, b) = (fit.coefficients[2 * k], fit.coefficients[2 * k + 1]);
                (a.hypot(b).max(1e-6 * scale), (-b).atan2(a))
            }
            None => (0.5 * scale, 0.0),
        };
        base.extend_from_slice(&[amplitude, 0.0, *frequency, psi]);
    }
    let mut lower = Vec::with_capacity(4 * count);
    let mut upper = Vec::with_capacity(4 * count);
    for frequency in frequencies {
        lower.extend_from_slice(&[0.0, -10.0 / span, frequency - 1.5 / span, f64::NEG_INFINITY]);
        upper.extend_from_slice(&[f64::INFINITY, 40.0 / span, frequency + 1.5 / span, f64::INFINITY]);
    }
    let bounds = Bounds::new(lower, upper)?;
    let sweeps = [*sweep];
    // The Jacobian reuses the factors of the residuals at the same parameters.
    let held = RefCell::new(HeldFactors::<DampedFactors>::default());
    let residuals = |p: &[f64], r: &mut [f64]| {
        let mut held = held.borrow_mut();
        let factors = held.hold(p, x.len() * count);
        projected_residuals(
            &sweeps,
            |_, i| {
                let d = x[i] - centre;
                p.chunks_exact(4)
                    .zip(&mut factors[i * count..(i + 1) * count])
                    .map(|(q, factors)| {
                        *factors = damped_factors(q, d);
                        q[0] * factors.decay * factors.cosine
                    })
                    .sum()
            },
            r,
        );
    };
    let starts: Vec<Vec<f64>> = [0.0, 4.0 / span]
        .iter()
        .map(|decay| {
            let mut start = base.clone();
            for k in 0..count {
                start[4 * k + 1] = *decay;
            }
            start
        })
        .collect();
    let mut scales = Vec::with_capacity(4 * count);
    for k in 0..count {
        scales.extend_from_slice(&[base[4 * k].max(1e-6 * scale), 1.0 / span, frequencies[k], 1.0]);
    }
    let options = LmOptions {
        parameter_scales: Some(scales),
        ..LmOptions::default()
    };
    let jacobian = |p: &[f64], j: &mut Matrix| {
        let held = held.borrow();
        let factors = held.at(p);
        projected_jacobian(
            &sweeps,
            4 * count,
            |_, i, row| {
                let d = x[i] - centre;
                for (k, (q, out)) in p.chunks_exact(4).zip(row.chunks_exact_mut(4)).enumerate() {
                    let point = factors.map_or_else(|| damped_factors(q, d), |factors| factors[i * count + k]);
                    damped_term_derivatives(q, d, point, out);
                }
            },
            j,
        );
    };
    let fit = LeastSquares::new(x.len(), residuals)
        .with_jacobian(jacobian)
        .with_bounds(bounds)
        .minimize_multi_start(&starts, &options, &SameMinimum::default())?
        .best;
    let correction = projection_correction(x.len(), 4 * count, sweep.linear_parameters());
    let components = (0..count)
        .map(|k| {
            let frequency = fit.parameters[4 * k + 2];
            let psi = fit.parameters[4 * k + 3];
            let frequency_unc = finite(fit.standard_errors[4 * k + 2] * correction);
            // phi = psi - 2 pi F x_c: var = var psi + (2 pi x_c)^2 var F - 2 (2 pi x_c) cov.
            let lever = 2.0 * PI * centre;
            let phase_variance = (fit.covariance[(4 * k + 3, 4 * k + 3)]
                + lever * lever * fit.covariance[(4 * k + 2, 4 * k + 2)]
                - 2.0 * lever * fit.covariance[(4 * k + 2, 4 * k + 3)])
                * correction
                * correction;
            RefinedComponent {
                frequency_t: frequency,
                frequency_unc_t: frequency_unc,
                amplitude_ohm_sq: fit.parameters[4 * k],
                decay_t: fit.parameters[4 * k + 1],
                phase_rad: wrap_phase(psi - lever * frequency),
                phase_unc_rad: if frequency_unc.is_some() && phase_variance >= 0.0 {
                    Some(phase_variance.sqrt())
                } else {
                    None
                },
            }
        })
        .collect();
    let model = x
        .iter()
        .map(|xi| damped_cosines(&fit.parameters, *xi, centre))
        .collect();
    Ok(Refinement { components, model })
}

/// Some(value) when it is a finite number (a standard error held at a bound is NaN).
pub(super) fn finite(value: f64) -> Option<f64> {
    value.is_finite().then_some(value)
}

/// Starting values of one component of the waveform fit.
#[derive(Debug, Clone, Copy)]
pub(super) struct WaveformStart {
    /// A_0 of A_0 R_T R_D(x - x_c), ohm per square.
    pub amplitude: f64,
    pub mass: f64,
    pub dingle_k: f64,
    pub frequency: f64,
    /// psi at the window centre.
    pub phase: f64,
}

/// The fitted Lifshitz-Kosevich waveform of one component.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct WaveformComponentFit {
    pub frequency_t: f64,
    pub frequency_unc_t: Option<f64>,
    pub effective_mass_ratio: f64,
    pub effective_mass_ratio_unc: Option<f64>,
    pub dingle_temperature_k: f64,
    pub dingle_temperature_unc_k: Option<f64>,
    /// A_0 R_D at the window centre without thermal damping, ohm per square.
    pub amplitude_ohm_sq: f64,
    pub phase_rad: f64,
}

/// The waveform fit, its statistics and its model at every sweep's points.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct WaveformOutcome {
    pub components: Vec<WaveformComponentFit>,
    pub reduced_chi_square: f64,
    pub points: usize,
    pub starts_at_best: usize,
    pub starts: usize,
    /// The oscillation model per sweep (without the background).
    pub models: Vec<Vec<f64>>,
}

/// The factors of one component of the Lifshitz-Kosevich model at one point: R_T, R_D and
/// the cosine, each as [`lifshitz_kosevich`] multiplies them.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct LkFactors {
    thermal: f64,
    dingle: f64,
    cosine: f64,
}

/// The factors of component `q` = [A, m, T_D, F, psi] at x (d = x - x_c).
#[inline]
fn lk_factors(q: &[f64], x: f64, d: f64, temperature_k: f64) -> LkFactors {
    LkFactors {
        thermal: thermal_damping(LK_FIELD_PER_KELVIN * q[1] * temperature_k * x),
        dingle: (-LK_FIELD_PER_KELVIN * q[1] * q[2] * d).exp(),
        cosine: (2.0 * PI * q[3] * d + q[4]).cos(),
    }
}

/// One component's term A R_T R_D cos(theta) from its factors.
#[inline]
fn lk_term(q: &[f64], factors: LkFactors) -> f64 {
    q[0] * factors.thermal * factors.dingle * factors.cosine
}

/// The derivatives of component `q`'s term with respect to [A, m, T_D, F, psi] into `out`,
/// from its factors at x (d R_T / dm through d ln R_T / dX, `thermal_damping_log_derivative`).
#[inline]
fn lk_term_derivatives(q: &[f64], x: f64, d: f64, temperature_k: f64, factors: LkFactors, out: &mut [f64]) {
    let LkFactors {
        thermal,
        dingle,
        cosine,
    } = factors;
    let argument = LK_FIELD_PER_KELVIN * q[1] * temperature_k * x;
    let sine = (2.0 * PI * q[3] * d + q[4]).sin();
    let in_phase = q[0] * thermal * dingle * cosine;
    let quadrature = q[0] * thermal * dingle * sine;
    out[0] = thermal * dingle * cosine;
    out[1] = in_phase
        * (thermal_damping_log_derivative(argument) * LK_FIELD_PER_KELVIN * temperature_k * x
            - LK_FIELD_PER_KELVIN * q[2] * d);
    out[2] = -in_phase * LK_FIELD_PER_KELVIN * q[1] * d;
    out[3] = -2.0 * PI * d * quadrature;
    out[4] = -quadrature;
}

/// sum_k A_k R_T(c m_k T x) exp(-c m_k T_D,k (x - x_c)) cos(2 pi F_k (x - x_c) + psi_k) with
/// parameters [A, m, T_D, F, psi] per component.
fn lifshitz_kosevich(p: &[f64], x: f64, temperature_k: f64, centre: f64) -> f64 {
    let d = x - centre;
    p.chunks_exact(5)
        .map(|q| lk_term(q, lk_factors(q, x, d, temperature_k)))
        .sum()
}

/// The derivatives of [`lifshitz_kosevich`] with respect to [A, m, T_D, F, psi] per
/// component.
#[cfg(test)]
fn lifshitz_kosevich_derivatives(p: &[f64], x: f64, temperature_k: f64, centre: f64, row: &mut [f64]) {
    let d = x - centre;
    for (q, out) in p.chunks_exact(5).zip(row.chunks_exact_mut(5)) {
        lk_term_derivatives(q, x, d, temperature_k, lk_factors(q, x, d, temperature_k), out);
    }
}

/// The projected residuals of the waveform fit at `p` into `r` (as [`projected_residuals`]
/// with [`lifshitz_kosevich`] gives them), holding the model's factors (points of every
/// sweep consecutively, lines within a point).
fn lk_residuals(
    sweeps: &[FitSweep],
    offsets: &[usize],
    centre: f64,
    p: &[f64],
    held: &mut HeldFactors<LkFactors>,
    r: &mut [f64],
) {
    let count = p.len() / 5;
    let factors = held.hold(p, r.len() * count);
    projected_residuals(
        sweeps,
        |s, i| {
            let sweep = &sweeps[s];
            let x = sweep.x[i];
            let d = x - centre;
            let point = (offsets[s] + i) * count;
            p.chunks_exact(5)
                .zip(&mut factors[point..point + count])
                .map(|(q, factors)| {
                    *factors = lk_factors(q, x, d, sweep.temperature_k);
                    lk_term(q, *factors)
                })
                .sum()
        },
        r,
    );
}

/// Fits sum_k A_k R_T(X_k(T, x)) exp(-c m_k T_D,k (x - x_c)) cos(2 pi F_k (x - x_c) + psi_k),
/// X_k = c m_k T x, c = 2 pi^2 k_B m_0 / (hbar e), jointly to every sweep's points, each
/// sweep at its own temperature and with its own polynomial background when there is one.
/// Starts: the given ones with their masses times each of `mass_factors` (the analysis
/// uses [`WAVEFORM_MASS_FACTORS`]; a refit from a converged fit needs only 1).
pub(super) fn fit_waveform(
    sweeps: &[FitSweep],
    starts: &[WaveformStart],
    centre: f64,
    span: f64,
    mass_factors: &[f64],
) -> Result<WaveformOutcome, FitError> {
    let count = starts.len();
    let points: usize = sweeps.iter().map(|s| s.x.len()).sum();
    let mut lower = Vec::with_capacity(5 * count);
    let mut upper = Vec::with_capacity(5 * count);
    let mut scales = Vec::with_capacity(5 * count);
    for start in starts {
        lower.extend_from_slice(&[0.0, 1e-3, 0.0, start.frequency - 1.5 / span, f64::NEG_INFINITY]);
        upper.extend_from_slice(&[f64::INFINITY, 20.0, 200.0, start.frequency + 1.5 / span, f64::INFINITY]);
        scales.extend_from_slice(&[
            start.amplitude.abs().max(f64::MIN_POSITIVE),
            start.mass,
            1.0,
            start.frequency,
            1.0,
        ]);
    }
    let bounds = Bounds::new(lower, upper)?;
    let start_vectors: Vec<Vec<f64>> = mass_factors
        .iter()
        .map(|factor| {
            starts
                .iter()
                .flat_map(|s| {
                    let mass = (s.mass * factor).clamp(2e-3, 10.0);
                    [s.amplitude, mass, s.dingle_k.clamp(0.0, 100.0), s.frequency, s.phase]
                })
                .collect()
        })
        .collect();
    let options = LmOptions {
        parameter_scales: Some(scales),
        ..LmOptions::default()
    };
    let offsets = sweep_offsets(sweeps);
    let offsets = &offsets;
    // Each run has its own evaluation, shared by its residuals and its Jacobian.
    let problem = || {
        let factors = Rc::new(RefCell::new(HeldFactors::default()));
        let filled = Rc::clone(&factors);
        let residuals =
            move |p: &[f64], r: &mut [f64]| lk_residuals(sweeps, offsets, centre, p, &mut filled.borrow_mut(), r);
        let jacobian = move |p: &[f64], j: &mut Matrix| {
            let factors = factors.borrow();
            let held = factors.at(p);
            projected_jacobian(
                sweeps,
                5 * count,
                |s, i, row| {
                    let sweep = &sweeps[s];
                    let x = sweep.x[i];
                    let d = x - centre;
                    let point = offsets[s] + i;
                    for (k, (q, out)) in p.chunks_exact(5).zip(row.chunks_exact_mut(5)).enumerate() {
                        let factors = match held {
                            Some(factors) => factors[point * count + k],
                            None => lk_factors(q, x, d, sweep.temperature_k),
                        };
                        lk_term_derivatives(q, x, d, sweep.temperature_k, factors, out);
                    }
                },
                j,
            );
        };
        LeastSquares::new(points, residuals)
            .with_jacobian(jacobian)
            .with_bounds(bounds.clone())
    };
    // The starts are independent runs: they share the rayon pool with the other passes of
    // the analysis, and the best is chosen in their order, as in a serial run.
    let multi = minimize_multi_start_parallel(problem, &start_vectors, &options, &SameMinimum::default())?;
    let fit: &LmFit = &multi.best;
    let linear: usize = sweeps.iter().map(FitSweep::linear_parameters).sum();
    let correction = projection_correction(points, 5 * count, linear);
    let components = (0..count)
        .map(|k| {
            let q = &fit.parameters[5 * k..5 * k + 5];
            let lever = 2.0 * PI * centre;
            WaveformComponentFit {
                frequency_t: q[3],
                frequency_unc_t: finite(fit.standard_errors[5 * k + 3] * correction),
                effective_mass_ratio: q[1],
                effective_mass_ratio_unc: finite(fit.standard_errors[5 * k + 1] * correction),
                dingle_temperature_k: q[2],
                dingle_temperature_unc_k: finite(fit.standard_errors[5 * k + 2] * correction),
                amplitude_ohm_sq: q[0],
                phase_rad: wrap_phase(q[4] - lever * q[3]),
            }
        })
        .collect();
    let models = sweeps
        .iter()
        .map(|sweep| {
            sweep
                .x
                .iter()
                .map(|xi| lifshitz_kosevich(&fit.parameters, *xi, sweep.temperature_k, centre))
                .collect()
        })
        .collect();
    Ok(WaveformOutcome {
        components,
        reduced_chi_square: fit.reduced_chi_square * correction * correction,
        points,
        starts_at_best: multi.same_minimum,
        starts: start_vectors.len(),
        models,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // Ordinary least squares of an exact line recovers it; the covariance of a noisy line
    // matches the closed form var(slope) = s^2 / S_xx (Bevington and Robinson, ch. 6).
    #[test]
    fn waveform_linear_fit_matches_the_closed_line() {
        let x: Vec<f64> = (0..20).map(|k| k as f64 * 0.1).collect();
        let y: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(k, v)| 1.0 + 2.0 * v + if k % 2 == 0 { 0.01 } else { -0.01 })
            .collect();
        let design = Matrix::from_fn(x.len(), 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let fit = linear_least_squares(&design, &y).unwrap();
        let line = mobilis_numerics::fit::fit_line(&x, &y, None).unwrap();
        assert!((fit.coefficients[1] - line.slope).abs() < 1e-12);
        assert!((fit.covariance[(1, 1)].sqrt() - line.slope_unc).abs() < 1e-12 * line.slope_unc.max(1.0));
        let short = Matrix::from_fn(2, 2, |i, j| if j == 0 { 1.0 } else { i as f64 });
        assert!(linear_least_squares(&short, &[1.0, 2.0]).is_none());
    }

    // The analytic derivatives of both models agree with central differences (calculus; no
    // outside values).
    #[test]
    fn waveform_analytic_derivatives_match_differences() {
        let damped = [2.0, 1.5, 37.0, 0.4, 0.7, -0.5, 81.0, -2.0];
        let lk = [3.0, 0.08, 1.2, 41.0, 0.3];
        for x in [0.13, 0.4, 0.95] {
            let mut row = vec![0.0; damped.len()];
            damped_cosines_derivatives(&damped, x, 0.5, &mut row);
            for j in 0..damped.len() {
                let h = 1e-6 * damped[j].abs().max(1e-3);
                let (mut up, mut down) = (damped, damped);
                up[j] += h;
                down[j] -= h;
                let numeric = (damped_cosines(&up, x, 0.5) - damped_cosines(&down, x, 0.5)) / (2.0 * h);
                assert!(
                    (numeric - row[j]).abs() < 1e-6 * (1.0 + numeric.abs()),
                    "{j}: {numeric} {}",
                    row[j]
                );
            }
            let mut row = vec![0.0; lk.len()];
            lifshitz_kosevich_derivatives(&lk, x, 6.0, 0.5, &mut row);
            for j in 0..lk.len() {
                let h = 1e-6 * lk[j].abs();
                let (mut up, mut down) = (lk, lk);
                up[j] += h;
                down[j] -= h;
                let numeric = (lifshitz_kosevich(&up, x, 6.0, 0.5) - lifshitz_kosevich(&down, x, 6.0, 0.5)) / (2.0 * h);
                assert!(
                    (numeric - row[j]).abs() < 1e-6 * (1.0 + numeric.abs()),
                    "{j}: {numeric} {}",
                    row[j]
                );
            }
        }
    }

    // The residuals hold the factors the Jacobian reuses: at the same parameters they are
    // the ones computed afresh, bit for bit, and at other parameters none are offered (the
    // fits' results must not depend on whether the Jacobian found them held).
    #[test]
    fn waveform_held_factors_are_the_fresh_ones() {
        let x: Vec<f64> = (0..40).map(|k| 0.1 + k as f64 * 0.01).collect();
        let target = vec![0.0; x.len()];
        let sweeps = [
            FitSweep {
                x: &x,
                target: &target,
                temperature_k: 2.0,
                projection: None,
            },
            FitSweep {
                x: &x[5..],
                target: &target[5..],
                temperature_k: 6.0,
                projection: None,
            },
        ];
        let offsets = sweep_offsets(&sweeps);
        let p = [3.0, 0.08, 1.2, 41.0, 0.3, 0.5, 0.2, 0.7, 83.0, -1.0];
        let mut held = HeldFactors::default();
        let mut r = vec![0.0; x.len() * 2 - 5];
        lk_residuals(&sweeps, &offsets, 0.3, &p, &mut held, &mut r);
        let factors = held.at(&p).expect("held at the parameters evaluated");
        for (s, sweep) in sweeps.iter().enumerate() {
            for (i, &xi) in sweep.x.iter().enumerate() {
                let point = offsets[s] + i;
                assert_eq!(
                    r[point].to_bits(),
                    lifshitz_kosevich(&p, xi, sweep.temperature_k, 0.3).to_bits()
                );
                for (k, q) in p.chunks_exact(5).enumerate() {
                    assert_eq!(factors[point * 2 + k], lk_factors(q, xi, xi - 0.3, sweep.temperature_k));
                }
            }
        }
        let mut moved = p;
        moved[1] = 0.0800000001;
        assert!(held.at(&moved).is_none());
    }

    // A pure cosine of known phase is all in phase; shifted by a quarter period it is all in
    // quadrature, and the phase correction recovers the shift.
    #[test]
    fn waveform_in_phase_amplitude_of_a_cosine() {
        let x: Vec<f64> = (0..400).map(|k| 0.1 + k as f64 * 0.001).collect();
        let (frequency, phase) = (30.0, 0.4);
        let y: Vec<f64> = x
            .iter()
            .map(|v| 2.5 * (2.0 * PI * frequency * v + phase).cos())
            .collect();
        let window = in_phase_amplitude(&x, &y, (0.15, 0.35), frequency, phase, None, None).unwrap();
        assert!((window.amplitude - 2.5).abs() < 1e-10, "{window:?}");
        assert!(window.quadrature.abs() < 1e-10);
        let shifted = in_phase_amplitude(&x, &y, (0.15, 0.35), frequency, phase - PI / 2.0, None, None).unwrap();
        assert!(shifted.amplitude.abs() < 1e-10 && (shifted.quadrature.abs() - 2.5).abs() < 1e-10);
        assert!((wrap_phase(phase - PI / 2.0 - shifted.phase_correction()) - phase).abs() < 1e-10);
        assert!(in_phase_amplitude(&x, &y, (0.15, 0.152), frequency, phase, None, None).is_none());
        // A decaying cosine with the decay as the envelope: the amplitude at the mean x.
        let decaying: Vec<f64> = x
            .iter()
            .map(|v| 2.5 * (-3.0 * v).exp() * (2.0 * PI * frequency * v + phase).cos())
            .collect();
        let shape = |v: f64, mean: f64| (-3.0 * (v - mean)).exp();
        let window = in_phase_amplitude(&x, &decaying, (0.15, 0.35), frequency, phase, Some(&shape), None).unwrap();
        let expected = 2.5 * (-3.0 * window.mean_inverse_field).exp();
        assert!((window.amplitude - expected).abs() < 1e-10 * expected, "{window:?}");
        assert!((wrap_phase(3.0 * PI) - PI).abs() < 1e-15);
        assert!((wrap_phase(-PI / 2.0) + PI / 2.0).abs() < 1e-15);
    }
}
