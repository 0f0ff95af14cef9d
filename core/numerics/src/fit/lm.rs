//! The bounded Levenberg-Marquardt solver (the method is described in the parent module).

use std::cell::Cell;

use super::error::FitError;
use crate::linalg::{dot, norm, Matrix, ProjectedSvd, Svd};

/// Box constraints lower_j <= p_j <= upper_j; infinite sides are allowed.
#[derive(Debug, Clone, PartialEq)]
pub struct Bounds {
    lower: Vec<f64>,
    upper: Vec<f64>,
}

impl Bounds {
    /// No constraint on any of `parameters` parameters.
    pub fn unbounded(parameters: usize) -> Self {
        Bounds {
            lower: vec![f64::NEG_INFINITY; parameters],
            upper: vec![f64::INFINITY; parameters],
        }
    }

    /// Bounds from per-parameter lower and upper limits. Equal limits fix a parameter.
    pub fn new(lower: Vec<f64>, upper: Vec<f64>) -> Result<Self, FitError> {
        if lower.len() != upper.len() {
            return Err(FitError::LengthMismatch {
                what: "the upper bounds",
                expected: lower.len(),
                got: upper.len(),
            });
        }
        for (index, (lo, hi)) in lower.iter().zip(&upper).enumerate() {
            if lo.is_nan() || hi.is_nan() || lo > hi || *lo == f64::INFINITY || *hi == f64::NEG_INFINITY {
                return Err(FitError::InvalidBounds {
                    index,
                    lower: *lo,
                    upper: *hi,
                });
            }
        }
        Ok(Bounds { lower, upper })
    }

    pub fn lower(&self) -> &[f64] {
        &self.lower
    }

    pub fn upper(&self) -> &[f64] {
        &self.upper
    }

    /// The number of parameters.
    pub fn len(&self) -> usize {
        self.lower.len()
    }

    pub fn is_empty(&self) -> bool {
        self.lower.is_empty()
    }

    /// `value` moved into [lower_j, upper_j].
    pub fn clamp(&self, index: usize, value: f64) -> f64 {
        value.max(self.lower[index]).min(self.upper[index])
    }

    fn is_fixed(&self, index: usize) -> bool {
        self.lower[index] == self.upper[index]
    }
}

/// Settings of the solver; [`LmOptions::default`] documents the defaults.
#[derive(Debug, Clone, PartialEq)]
pub struct LmOptions {
    /// The residuals are (model - data) / sigma with known sigma: the covariance is
    /// (J^T J)^-1 as it stands. When false (default) it is scaled by chi^2 / nu.
    pub residuals_are_weighted: bool,
    /// Outer iterations (Jacobian evaluations) before giving up. Default 200.
    pub max_iterations: usize,
    /// Relative step size that counts as converged. Default 1e-10.
    pub step_tolerance: f64,
    /// Gradient cosine that counts as converged. Default 1e-10.
    pub gradient_tolerance: f64,
    /// Relative cost reduction (actual and predicted) that counts as converged.
    /// Default 1e-12.
    pub cost_tolerance: f64,
    /// Relative step of the central differences. Default eps^(1/3) = 6.06e-6, which balances
    /// truncation (h^2) against rounding (eps / h) for a smooth residual.
    pub difference_step: f64,
    /// Typical magnitude of each parameter, the floor of the difference step and of the
    /// step test. Default: |start_j|, or 1 when the start is 0.
    pub parameter_scales: Option<Vec<f64>>,
    /// tau of the first damping lambda = tau s_max^2. Default 1e-3: close to Gauss-Newton,
    /// right for a reasonable start (Madsen, Nielsen and Tingleff 2004 suggest 1e-6 to 1).
    pub initial_damping: f64,
    /// Scaled singular values at or below this times the largest make the covariance
    /// singular. Default 1e-10: a direction 1e10 times less determined than the best one
    /// has no meaningful uncertainty.
    pub singular_tolerance: f64,
}

impl Default for LmOptions {
    fn default() -> Self {
        LmOptions {
            residuals_are_weighted: false,
            max_iterations: 200,
            step_tolerance: 1e-10,
            gradient_tolerance: 1e-10,
            cost_tolerance: 1e-12,
            difference_step: f64::EPSILON.cbrt(),
            parameter_scales: None,
            initial_damping: 1e-3,
            singular_tolerance: 1e-10,
        }
    }
}

impl LmOptions {
    fn validate(&self, parameters: usize) -> Result<(), FitError> {
        let positive = "give a finite positive number";
        let checks = [
            ("step_tolerance", self.step_tolerance),
            ("gradient_tolerance", self.gradient_tolerance),
            ("cost_tolerance", self.cost_tolerance),
            ("difference_step", self.difference_step),
            ("initial_damping", self.initial_damping),
            ("singular_tolerance", self.singular_tolerance),
        ];
        for (name, value) in checks {
            if !(value.is_finite() && value > 0.0) {
                return Err(FitError::InvalidOption {
                    name,
                    value,
                    requirement: positive,
                });
            }
        }
        if self.difference_step >= 0.1 {
            return Err(FitError::InvalidOption {
                name: "difference_step",
                value: self.difference_step,
                requirement: "give a relative step well below 0.1 (the default eps^(1/3) suits smooth models)",
            });
        }
        if self.max_iterations == 0 {
            return Err(FitError::InvalidOption {
                name: "max_iterations",
                value: 0.0,
                requirement: "give at least one iteration",
            });
        }
        if let Some(scales) = &self.parameter_scales {
            if scales.len() != parameters {
                return Err(FitError::LengthMismatch {
                    what: "parameter_scales",
                    expected: parameters,
                    got: scales.len(),
                });
            }
            if let Some(bad) = scales.iter().find(|scale| !(scale.is_finite() && **scale > 0.0)) {
                return Err(FitError::InvalidOption {
                    name: "parameter_scales",
                    value: *bad,
                    requirement: "give a finite positive typical magnitude for every parameter",
                });
            }
        }
        Ok(())
    }
}

/// Why the iterations stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum Termination {
    /// Every free parameter's gradient cosine is below the gradient tolerance.
    Gradient,
    /// The last accepted step was below the step tolerance.
    Step,
    /// The last accepted step reduced the cost by less than the cost tolerance.
    Cost,
    /// The residuals vanished to rounding (an exact fit).
    ResidualsVanished,
    /// No downhill step exists within rounding.
    NoFurtherReduction,
    /// `max_iterations` was reached.
    MaxIterations,
}

/// A converged (or exhausted) Levenberg-Marquardt run.
#[derive(Debug, Clone, PartialEq)]
pub struct LmFit {
    pub parameters: Vec<f64>,
    /// n x n; scaled by the reduced chi-square unless the residuals are weighted. Rows and
    /// columns of parameters held at a bound or fixed are zero.
    pub covariance: Matrix,
    /// sqrt of the covariance diagonal; NaN for a parameter held at a bound, 0 for one
    /// fixed by equal bounds.
    pub standard_errors: Vec<f64>,
    /// The residuals at the solution.
    pub residuals: Vec<f64>,
    /// sum r_i^2 at the solution.
    pub chi_square: f64,
    /// sum r_i^2 at the (clamped) start.
    pub initial_chi_square: f64,
    /// m minus the number of parameters not fixed by equal bounds.
    pub degrees_of_freedom: usize,
    /// chi^2 / nu (NaN when nu = 0, possible only with weighted residuals).
    pub reduced_chi_square: f64,
    pub iterations: usize,
    /// Residual evaluations, including those of the finite differences.
    pub evaluations: usize,
    pub converged: bool,
    pub termination: Termination,
    /// True for a parameter that ended on one of its bounds (or is fixed).
    pub at_bound: Vec<bool>,
    pub residuals_are_weighted: bool,
}

impl LmFit {
    /// The correlation matrix (covariance over the product of standard errors); 0 where a
    /// standard error is 0 or NaN.
    pub fn correlation(&self) -> Matrix {
        let n = self.parameters.len();
        Matrix::from_fn(n, n, |i, j| {
            let scale = self.standard_errors[i] * self.standard_errors[j];
            if scale > 0.0 {
                self.covariance[(i, j)] / scale
            } else if i == j && self.standard_errors[i] > 0.0 {
                1.0
            } else {
                0.0
            }
        })
    }
}

type ResidualFn<'a> = Box<dyn Fn(&[f64], &mut [f64]) + 'a>;
type SharedResidualFn<'a> = Box<dyn Fn(&[f64], &mut [f64]) + Sync + 'a>;

/// The residual function, plain or callable from several threads at once.
enum Residuals<'a> {
    Plain(ResidualFn<'a>),
    /// The columns of a finite-difference Jacobian are then evaluated in parallel: each
    /// column is computed exactly as in the serial loop, so the Jacobian is the same to the
    /// last bit.
    Shared(SharedResidualFn<'a>),
}

impl Residuals<'_> {
    fn call(&self, x: &[f64], r: &mut [f64]) {
        match self {
            Residuals::Plain(function) => function(x, r),
            Residuals::Shared(function) => function(x, r),
        }
    }
}
type JacobianFn<'a> = Box<dyn Fn(&[f64], &mut Matrix) + 'a>;

/// A least-squares problem: m residuals of n parameters, optional analytic Jacobian, box
/// bounds.
pub struct LeastSquares<'a> {
    residual_count: usize,
    residuals: Residuals<'a>,
    jacobian: Option<JacobianFn<'a>>,
    bounds: Option<Bounds>,
    /// See [`LeastSquares::with_residuals_finite_in_bounds`].
    finite_in_bounds: bool,
}

impl<'a> LeastSquares<'a> {
    /// `residuals(p, r)` writes the `residual_count` residuals at parameters `p` into `r`.
    pub fn new(residual_count: usize, residuals: impl Fn(&[f64], &mut [f64]) + 'a) -> Self {
        LeastSquares {
            residual_count,
            residuals: Residuals::Plain(Box::new(residuals)),
            jacobian: None,
            bounds: None,
            finite_in_bounds: false,
        }
    }

    /// [`LeastSquares::new`] for a residual function that may be called from several threads
    /// at once: without an analytic Jacobian, the finite-difference columns are then
    /// evaluated on the rayon pool. Worth it when one residual evaluation is expensive
    /// (tens of microseconds and more); the results are the same to the last bit.
    pub fn new_shared(residual_count: usize, residuals: impl Fn(&[f64], &mut [f64]) + Sync + 'a) -> Self {
        LeastSquares {
            residual_count,
            residuals: Residuals::Shared(Box::new(residuals)),
            jacobian: None,
            bounds: None,
            finite_in_bounds: false,
        }
    }

    /// An analytic Jacobian: `jacobian(p, J)` writes dr_i/dp_j into J(i, j) (an m x n matrix
    /// of zeros on entry).
    pub fn with_jacobian(mut self, jacobian: impl Fn(&[f64], &mut Matrix) + 'a) -> Self {
        self.jacobian = Some(Box::new(jacobian));
        self
    }

    /// Box constraints (default: none).
    pub fn with_bounds(mut self, bounds: Bounds) -> Self {
        self.bounds = Some(bounds);
        self
    }

    /// Declares that the residuals are finite wherever the parameters are within the bounds
    /// (a model defined on the whole box), so that the Jacobian at the end of a run, which only
    /// the covariance needs, cannot fail. A run then leaves it to [`LeastSquares::minimize`]
    /// and to the chosen run of a multi-start fit: each other start saves one Jacobian. The
    /// results are the same to the last bit. Without the declaration every run computes it
    /// and fails when it is not finite, as a run that the covariance cannot use.
    pub fn with_residuals_finite_in_bounds(mut self) -> Self {
        self.finite_in_bounds = true;
        self
    }

    pub fn residual_count(&self) -> usize {
        self.residual_count
    }

    /// Runs the solver from `start`.
    pub fn minimize(&self, start: &[f64], options: &LmOptions) -> Result<LmFit, FitError> {
        let raw = self.solve(start, options)?;
        self.finish(raw, options)
    }

    fn bounds_for(&self, parameters: usize) -> std::borrow::Cow<'_, Bounds> {
        match &self.bounds {
            Some(bounds) => std::borrow::Cow::Borrowed(bounds),
            None => std::borrow::Cow::Owned(Bounds::unbounded(parameters)),
        }
    }

    /// The iterations alone, without the covariance (multi-start compares runs by their
    /// chi-square before asking for the covariance of the best).
    pub(super) fn solve(&self, start: &[f64], options: &LmOptions) -> Result<RawRun, FitError> {
        let n = start.len();
        if n == 0 {
            return Err(FitError::NoParameters);
        }
        let bounds = self.bounds_for(n);
        let bounds = bounds.as_ref();
        if bounds.len() != n {
            return Err(FitError::LengthMismatch {
                what: "the bounds",
                expected: n,
                got: bounds.len(),
            });
        }
        options.validate(n)?;
        if let Some((index, value)) = start.iter().enumerate().find(|(_, value)| !value.is_finite()) {
            return Err(FitError::NonFiniteStart { index, value: *value });
        }
        let free_parameters = (0..n).filter(|j| !bounds.is_fixed(*j)).count();
        let required = if options.residuals_are_weighted {
            free_parameters
        } else {
            free_parameters + 1
        };
        if self.residual_count < required.max(1) {
            return Err(FitError::TooFewResiduals {
                residuals: self.residual_count,
                parameters: free_parameters,
            });
        }
        let scales: Vec<f64> = match &options.parameter_scales {
            Some(scales) => scales.clone(),
            None => start
                .iter()
                .map(|value| if *value != 0.0 { value.abs() } else { 1.0 })
                .collect(),
        };
        let solver = Solver {
            problem: self,
            bounds,
            options,
            scales,
            m: self.residual_count,
            n,
            evaluations: Cell::new(0),
        };
        solver.run(start)
    }

    /// The covariance and statistics of a finished run.
    pub(super) fn finish(&self, mut raw: RawRun, options: &LmOptions) -> Result<LmFit, FitError> {
        let bounds = self.bounds_for(raw.x.len());
        if raw.jacobian.is_none() {
            // Left by the run (see `with_residuals_finite_in_bounds`): computed as the run
            // would have, and counted with its evaluations.
            let n = raw.x.len();
            let solver = Solver {
                problem: self,
                bounds: bounds.as_ref(),
                options,
                scales: raw.scales.clone(),
                m: self.residual_count,
                n,
                evaluations: Cell::new(raw.evaluations),
            };
            let mut jacobian = Matrix::zeros(self.residual_count, n);
            solver.jacobian(&raw.x, &raw.r, &mut jacobian)?;
            raw.jacobian = Some(jacobian);
            raw.evaluations = solver.evaluations.get();
        }
        finish(raw, bounds.as_ref(), options)
    }
}

/// Where a run ended, before the covariance is computed.
#[derive(Debug, Clone)]
pub(super) struct RawRun {
    pub x: Vec<f64>,
    pub r: Vec<f64>,
    /// The Jacobian at `x`; `None` when the run left it to [`LeastSquares::finish`].
    pub jacobian: Option<Matrix>,
    /// The parameters' typical magnitudes the run used (its finite-difference steps).
    pub scales: Vec<f64>,
    pub initial_cost: f64,
    pub iterations: usize,
    pub evaluations: usize,
    pub converged: bool,
    pub termination: Termination,
}

impl RawRun {
    pub fn chi_square(&self) -> f64 {
        dot(&self.r, &self.r)
    }
}

/// Fits `residual_count` residuals from `start` within `bounds`: the closure form of
/// [`LeastSquares::minimize`].
pub fn minimize(
    residuals: impl Fn(&[f64], &mut [f64]),
    residual_count: usize,
    start: &[f64],
    bounds: &Bounds,
    options: &LmOptions,
) -> Result<LmFit, FitError> {
    LeastSquares::new(residual_count, residuals)
        .with_bounds(bounds.clone())
        .minimize(start, options)
}

struct Solver<'p, 'a> {
    problem: &'p LeastSquares<'a>,
    bounds: &'p Bounds,
    options: &'p LmOptions,
    scales: Vec<f64>,
    m: usize,
    n: usize,
    evaluations: Cell<usize>,
}

/// Gain ratios above this accept a step: any real decrease of the cost (Nielsen 1999).
const ACCEPT_GAIN: f64 = 0.0;
/// lambda / s_max^2 beyond which a step is below rounding.
const MAX_RELATIVE_DAMPING: f64 = 1e16;

impl Solver<'_, '_> {
    fn evaluate(&self, x: &[f64], r: &mut [f64]) {
        self.evaluations.set(self.evaluations.get() + 1);
        self.problem.residuals.call(x, r);
    }

    fn jacobian(&self, x: &[f64], r: &[f64], jacobian: &mut Matrix) -> Result<(), FitError> {
        if let Some(analytic) = &self.problem.jacobian {
            // Zeros on entry, in the buffer of the last Jacobian when it has the shape.
            if jacobian.rows() == self.m && jacobian.cols() == self.n {
                jacobian.as_mut_slice().fill(0.0);
            } else {
                *jacobian = Matrix::zeros(self.m, self.n);
            }
            analytic(x, jacobian);
            for j in 0..self.n {
                if self.bounds.is_fixed(j) {
                    for i in 0..self.m {
                        jacobian[(i, j)] = 0.0;
                    }
                }
            }
            // The first non-finite entry of the first column that has one, looked for only
            // when there is one.
            if !jacobian.as_slice().iter().all(|value| value.is_finite()) {
                for j in 0..self.n {
                    if let Some(value) = (0..self.m).map(|i| jacobian[(i, j)]).find(|value| !value.is_finite()) {
                        return Err(FitError::NonFiniteJacobian { parameter: j, value });
                    }
                }
            }
            return Ok(());
        }
        self.numerical_jacobian(x, r, jacobian)
    }

    fn numerical_jacobian(&self, x: &[f64], r: &[f64], jacobian: &mut Matrix) -> Result<(), FitError> {
        let (m, n) = (self.m, self.n);
        if let Residuals::Shared(function) = &self.problem.residuals {
            if n > 1 && rayon::current_num_threads() > 1 {
                use rayon::prelude::*;
                let (bounds, step, scales) = (self.bounds, self.options.difference_step, &self.scales[..]);
                let columns: Vec<(Vec<f64>, usize)> = (0..n)
                    .into_par_iter()
                    .map_init(
                        || (x.to_vec(), vec![0.0; m], vec![0.0; m]),
                        |(shifted, first, second), j| {
                            let mut column = vec![0.0; m];
                            let evaluations = difference_column(
                                (bounds, step, scales),
                                &|p: &[f64], out: &mut [f64]| function(p, out),
                                x,
                                r,
                                j,
                                (shifted, first, second),
                                &mut column,
                            );
                            (column, evaluations)
                        },
                    )
                    .collect();
                for (j, (column, evaluations)) in columns.into_iter().enumerate() {
                    self.evaluations.set(self.evaluations.get() + evaluations);
                    for i in 0..m {
                        jacobian[(i, j)] = column[i];
                    }
                    if let Some(value) = column.into_iter().find(|value| !value.is_finite()) {
                        return Err(FitError::NonFiniteJacobian { parameter: j, value });
                    }
                }
                return Ok(());
            }
        }
        let mut shifted = x.to_vec();
        let mut first = vec![0.0; m];
        let mut second = vec![0.0; m];
        let mut column = vec![0.0; m];
        for j in 0..n {
            let evaluations = difference_column(
                (self.bounds, self.options.difference_step, &self.scales),
                &|p: &[f64], out: &mut [f64]| self.problem.residuals.call(p, out),
                x,
                r,
                j,
                (&mut shifted, &mut first, &mut second),
                &mut column,
            );
            self.evaluations.set(self.evaluations.get() + evaluations);
            for i in 0..m {
                jacobian[(i, j)] = column[i];
            }
            if let Some(value) = column.iter().copied().find(|value| !value.is_finite()) {
                return Err(FitError::NonFiniteJacobian { parameter: j, value });
            }
        }
        Ok(())
    }

    fn run(&self, start: &[f64]) -> Result<RawRun, FitError> {
        let (m, n) = (self.m, self.n);
        let options = self.options;
        let mut x: Vec<f64> = (0..n).map(|j| self.bounds.clamp(j, start[j])).collect();
        let mut r = vec![0.0; m];
        self.evaluate(&x, &mut r);
        if let Some((index, value)) = r.iter().enumerate().find(|(_, value)| !value.is_finite()) {
            return Err(FitError::NonFiniteResidual { index, value: *value });
        }
        let mut cost = 0.5 * dot(&r, &r);
        let initial_cost = cost;
        let mut jacobian = Matrix::zeros(m, n);
        let mut jacobian_is_current = false;
        let mut column_scale = vec![0.0f64; n];
        let mut lambda = f64::NAN;
        let mut nu = 2.0;
        let mut iterations = 0;
        let mut termination = Termination::MaxIterations;
        let mut trial = vec![0.0; n];
        let mut trial_r = vec![0.0; m];
        let mut gradient_cosine_at_stop = f64::INFINITY;

        'outer: while iterations < options.max_iterations {
            iterations += 1;
            if cost <= (4.0 * f64::EPSILON).powi(2) * initial_cost || cost == 0.0 {
                termination = Termination::ResidualsVanished;
                break;
            }
            self.jacobian(&x, &r, &mut jacobian)?;
            jacobian_is_current = true;
            // Each column copied once: its norm, and (scaled) a column of the SVD's input.
            let mut columns: Vec<Vec<f64>> = jacobian.columns();
            let column_norms: Vec<f64> = columns.iter().map(|column| norm(column)).collect();
            for j in 0..n {
                column_scale[j] = column_scale[j].max(column_norms[j]);
            }
            let gradient = jacobian.transpose_mul_vec(&r);
            let free: Vec<usize> = (0..n)
                .filter(|&j| {
                    !(self.bounds.is_fixed(j)
                        || (x[j] <= self.bounds.lower[j] && gradient[j] > 0.0)
                        || (x[j] >= self.bounds.upper[j] && gradient[j] < 0.0))
                })
                .collect();
            let residual_norm = (2.0 * cost).sqrt();
            let gradient_cosine = free
                .iter()
                .filter(|&&j| column_norms[j] > 0.0)
                .map(|&j| gradient[j].abs() / (column_norms[j] * residual_norm))
                .fold(0.0, f64::max);
            gradient_cosine_at_stop = gradient_cosine;
            if free.is_empty() || gradient_cosine <= options.gradient_tolerance {
                termination = Termination::Gradient;
                break;
            }
            let scale_of = |j: usize| if column_scale[j] > 0.0 { column_scale[j] } else { 1.0 };
            let scaled: Vec<Vec<f64>> = free
                .iter()
                .map(|&j| {
                    let scale = scale_of(j);
                    let mut column = std::mem::take(&mut columns[j]);
                    column.iter_mut().for_each(|value| *value /= scale);
                    column
                })
                .collect();
            // The step reads U only through U^T r: the decomposition gives that, not U.
            let ProjectedSvd {
                singular_values,
                v: svd_v,
                projected: projected_r,
            } = Svd::project_columns(m, scaled, &r)?;
            let largest_squared = singular_values[0] * singular_values[0];
            if largest_squared == 0.0 {
                termination = Termination::Gradient;
                break;
            }
            if lambda.is_nan() {
                lambda = options.initial_damping * largest_squared;
            }
            loop {
                let coefficients: Vec<f64> = singular_values
                    .iter()
                    .zip(&projected_r)
                    .map(|(s, ur)| -s / (s * s + lambda) * ur)
                    .collect();
                let scaled_step = svd_v.mul_vec(&coefficients);
                trial.copy_from_slice(&x);
                for (k, &j) in free.iter().enumerate() {
                    trial[j] = self.bounds.clamp(j, x[j] + scaled_step[k] / scale_of(j));
                }
                let step: Vec<f64> = trial.iter().zip(&x).map(|(t, xj)| t - xj).collect();
                let mut accepted = false;
                if step.iter().any(|value| *value != 0.0) {
                    // |J step + r|^2, each residual of the linear model formed and squared
                    // as it is summed.
                    let predicted_norm = jacobian
                        .as_slice()
                        .chunks_exact(n)
                        .zip(&r)
                        .map(|(row, ri)| {
                            let value = dot(row, &step) + ri;
                            value * value
                        })
                        .sum::<f64>();
                    let predicted = cost - 0.5 * predicted_norm;
                    self.evaluate(&trial, &mut trial_r);
                    if predicted > 0.0 && trial_r.iter().all(|value| value.is_finite()) {
                        let trial_cost = 0.5 * dot(&trial_r, &trial_r);
                        let actual = cost - trial_cost;
                        let gain = actual / predicted;
                        if gain > ACCEPT_GAIN {
                            accepted = true;
                            let small_cost =
                                actual <= options.cost_tolerance * cost && predicted <= options.cost_tolerance * cost;
                            let small_step = (0..n)
                                .all(|j| step[j].abs() <= options.step_tolerance * trial[j].abs().max(self.scales[j]));
                            x.copy_from_slice(&trial);
                            r.copy_from_slice(&trial_r);
                            cost = trial_cost;
                            jacobian_is_current = false;
                            lambda *= (1.0f64 / 3.0).max(1.0 - (2.0 * gain - 1.0).powi(3));
                            nu = 2.0;
                            if small_cost {
                                termination = Termination::Cost;
                                break 'outer;
                            }
                            if small_step {
                                termination = Termination::Step;
                                break 'outer;
                            }
                        }
                    }
                }
                if accepted {
                    continue 'outer;
                }
                lambda *= nu;
                nu *= 2.0;
                if lambda > MAX_RELATIVE_DAMPING * largest_squared || !lambda.is_finite() {
                    termination = Termination::NoFurtherReduction;
                    break 'outer;
                }
            }
        }
        let converged = match termination {
            Termination::MaxIterations => false,
            Termination::NoFurtherReduction => gradient_cosine_at_stop <= options.gradient_tolerance.sqrt(),
            _ => true,
        };
        let jacobian = if jacobian_is_current {
            Some(jacobian)
        } else if self.problem.finite_in_bounds {
            None
        } else {
            self.jacobian(&x, &r, &mut jacobian)?;
            Some(jacobian)
        };
        Ok(RawRun {
            x,
            r,
            jacobian,
            scales: self.scales.clone(),
            initial_cost,
            iterations,
            evaluations: self.evaluations.get(),
            converged,
            termination,
        })
    }
}

/// Column `j` of the finite-difference Jacobian into `column`; returns how many residual
/// evaluations it took. `shifted` equals `x` on entry and on return.
fn difference_column(
    (bounds, difference_step, scales): (&Bounds, f64, &[f64]),
    evaluate: &dyn Fn(&[f64], &mut [f64]),
    x: &[f64],
    r: &[f64],
    j: usize,
    (shifted, first, second): (&mut Vec<f64>, &mut Vec<f64>, &mut Vec<f64>),
    column: &mut [f64],
) -> usize {
    let m = column.len();
    let (lower, upper) = (bounds.lower[j], bounds.upper[j]);
    if lower == upper {
        column.fill(0.0);
        return 0;
    }
    let mut h = difference_step * x[j].abs().max(scales[j]);
    if upper - lower < 4.0 * h {
        h = (upper - lower) / 4.0;
    }
    let xj = x[j];
    if xj - h >= lower && xj + h <= upper {
        shifted[j] = xj + h;
        let forward = shifted[j] - xj;
        evaluate(shifted, first);
        shifted[j] = xj - h;
        let backward = xj - shifted[j];
        evaluate(shifted, second);
        for i in 0..m {
            column[i] = (first[i] - second[i]) / (forward + backward);
        }
    } else {
        // Second-order one-sided: towards the interior of the box.
        let direction = if xj + 2.0 * h <= upper { 1.0 } else { -1.0 };
        shifted[j] = xj + direction * h;
        let step = (shifted[j] - xj) * direction;
        evaluate(shifted, first);
        shifted[j] = xj + direction * 2.0 * step;
        evaluate(shifted, second);
        for i in 0..m {
            column[i] = direction * (-3.0 * r[i] + 4.0 * first[i] - second[i]) / (2.0 * step);
        }
    }
    shifted[j] = xj;
    2
}

fn finish(raw: RawRun, bounds: &Bounds, options: &LmOptions) -> Result<LmFit, FitError> {
    let RawRun {
        x,
        r,
        jacobian,
        initial_cost,
        iterations,
        evaluations,
        converged,
        termination,
        ..
    } = raw;
    let jacobian = jacobian.expect("LeastSquares::finish computes a Jacobian the run left");
    let (m, n) = (r.len(), x.len());
    let at_bound: Vec<bool> = (0..n)
        .map(|j| x[j] <= bounds.lower[j] || x[j] >= bounds.upper[j])
        .collect();
    let fixed = (0..n).filter(|&j| bounds.is_fixed(j)).count();
    let degrees_of_freedom = m - (n - fixed);
    let chi_square = dot(&r, &r);
    let reduced_chi_square = if degrees_of_freedom > 0 {
        chi_square / degrees_of_freedom as f64
    } else {
        f64::NAN
    };
    let free: Vec<usize> = (0..n).filter(|&j| !at_bound[j]).collect();
    let mut covariance = Matrix::zeros(n, n);
    let mut standard_errors: Vec<f64> = (0..n)
        .map(|j| if bounds.is_fixed(j) { 0.0 } else { f64::NAN })
        .collect();
    if !free.is_empty() {
        let column_norms: Vec<f64> = free.iter().map(|&j| norm(&jacobian.column(j))).collect();
        if let Some(k) = column_norms.iter().position(|value| *value == 0.0) {
            return Err(FitError::Singular {
                parameters: vec![free[k]],
            });
        }
        let scaled = Matrix::from_fn(m, free.len(), |i, k| jacobian[(i, free[k])] / column_norms[k]);
        let svd = Svd::new(&scaled)?;
        let singular_values = svd.singular_values();
        let rank = svd.rank(options.singular_tolerance);
        if rank < free.len() {
            // The parameters that carry the undetermined directions.
            let mut involved: Vec<usize> = Vec::new();
            for null_direction in rank..free.len() {
                for (k, &j) in free.iter().enumerate() {
                    if svd.v()[(k, null_direction)].abs() > 0.1 && !involved.contains(&j) {
                        involved.push(j);
                    }
                }
            }
            involved.sort_unstable();
            return Err(FitError::Singular { parameters: involved });
        }
        let variance_scale = if options.residuals_are_weighted {
            1.0
        } else {
            reduced_chi_square
        };
        for (a, &ja) in free.iter().enumerate() {
            for (b, &jb) in free.iter().enumerate() {
                let scaled_entry: f64 = (0..free.len())
                    .map(|k| svd.v()[(a, k)] * svd.v()[(b, k)] / (singular_values[k] * singular_values[k]))
                    .sum();
                covariance[(ja, jb)] = variance_scale * scaled_entry / (column_norms[a] * column_norms[b]);
            }
        }
        for &j in &free {
            standard_errors[j] = covariance[(j, j)].sqrt();
        }
    }
    Ok(LmFit {
        parameters: x,
        covariance,
        standard_errors,
        residuals: r,
        chi_square,
        initial_chi_square: 2.0 * initial_cost,
        degrees_of_freedom,
        reduced_chi_square,
        iterations,
        evaluations,
        converged,
        termination,
        at_bound,
        residuals_are_weighted: options.residuals_are_weighted,
    })
}
