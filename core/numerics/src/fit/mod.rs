//! Least-squares fitting shared by the analysis plugins: a bounded Levenberg-Marquardt
//! solver, multi-start, and the weighted straight line.
//!
//! # Levenberg-Marquardt ([`LeastSquares`], [`minimize`])
//!
//! Minimizes the cost C(p) = (1/2) sum r_i(p)^2 of m residuals in n parameters, m >= n.
//!
//! - **Step.** Each iteration solves the damped Gauss-Newton system
//!   (J^T J + lambda D^2) delta = -J^T r (Levenberg 1944, Marquardt 1963) through the SVD of
//!   the column-scaled Jacobian J D^-1 = U S V^T: delta = -D^-1 V diag(s / (s^2 + lambda))
//!   U^T r. One SVD per Jacobian serves every trial lambda, the condition number is never
//!   squared, and exactly dependent directions simply get no step.
//! - **Scaling.** D = diag(d_j) with d_j the largest Euclidean norm column j of J has had so
//!   far (Moré, "The Levenberg-Marquardt algorithm: implementation and theory", Lecture Notes
//!   in Mathematics 630, 1978), so the iterates do not depend on the parameters' units.
//! - **Damping.** lambda starts at tau s_max^2 (tau = [`LmOptions::initial_damping`],
//!   default 1e-3) and follows Nielsen's rule (H. B. Nielsen, "Damping parameter in
//!   Marquardt's method", IMM-REP-1999-05, DTU; as in Madsen, Nielsen and Tingleff, "Methods
//!   for non-linear least squares problems", 2004): with the gain ratio rho = actual cost
//!   reduction / reduction predicted by the linear model, a step with rho > 0 is accepted and
//!   lambda *= max(1/3, 1 - (2 rho - 1)^3), nu = 2; otherwise lambda *= nu, nu *= 2. A
//!   trial point where a residual is not finite is rejected like an uphill step.
//! - **Bounds** (lower <= p <= upper, either side may be infinite) by projection with an
//!   active set: a parameter at a bound whose gradient component pushes it outward is held
//!   for that iteration (its column leaves the step system); the step of the others is
//!   computed as above and the trial point is clamped into the box, the predicted reduction
//!   being that of the clamped step. Equal lower and upper bounds fix a parameter. The start
//!   is clamped into the box.
//! - **Jacobian.** Analytic when given ([`LeastSquares::with_jacobian`]); otherwise central
//!   differences with step h_j = [`LmOptions::difference_step`] x max(|p_j|, s_j), s_j the
//!   parameter's typical scale ([`LmOptions::parameter_scales`], by default |start_j| or 1
//!   when the start is 0). Near a bound the stencil becomes the second-order one-sided
//!   (-3 f(p) + 4 f(p + h) - f(p + 2h)) / 2h, so residuals are never evaluated outside the
//!   box; a box narrower than 4h shrinks h.
//! - **Convergence** ([`Termination`]): (a) every free parameter's gradient cosine
//!   |J_j^T r| / (||J_j|| ||r||) <= `gradient_tolerance`; (b) an accepted step with
//!   |delta_j| <= `step_tolerance` x max(|p_j|, s_j) for every j; (c) an accepted step whose
//!   actual and predicted cost reductions are both <= `cost_tolerance` x C; (d) the
//!   residuals have vanished, ||r|| <= 4 eps ||r_start||. If lambda grows past 1e16 s_max^2
//!   without an accepted step (no downhill step exists within rounding), the run stops and
//!   counts as converged only when the gradient cosines are below sqrt(`gradient_tolerance`).
//!   Reaching `max_iterations` is not convergence.
//!
//! # Uncertainties
//!
//! The covariance is (J^T J)^-1 at the solution, from the SVD of the scaled Jacobian,
//! multiplied by the reduced chi-square chi^2 / nu unless [`LmOptions::residuals_are_weighted`]
//! says the residuals are already (model - data) / sigma with known sigma. chi^2 = sum r_i^2
//! (in the residuals' own units when they are not weighted), nu = m minus the number of
//! parameters not fixed by equal bounds. Parameters held at a bound are treated as fixed:
//! their rows and columns of the covariance are zero and their standard error is NaN (the
//! curvature says nothing about a one-sided minimum; [`LmFit::at_bound`] tells which). A
//! Jacobian whose scaled singular values fall below [`LmOptions::singular_tolerance`] times
//! the largest is refused ([`FitError::Singular`], naming the parameters of the
//! undetermined direction).
//!
//! # Multi-start ([`LeastSquares::minimize_multi_start`])
//!
//! Runs from each start, keeps the converged run of lowest chi-square and counts how many
//! converged runs reached the same minimum ([`SameMinimum`]).
//! [`minimize_multi_start_parallel`] spreads the runs over the rayon pool and gives the same
//! result to the last bit. Only the chosen run needs the Jacobian at its end (for the
//! covariance): a problem whose residuals are finite throughout its bounds
//! ([`LeastSquares::with_residuals_finite_in_bounds`]) computes it for that run alone.
//!
//! # Fit quality ([`quality`])
//!
//! The p-value of a chi-square, the Birge scaling of a covariance when the data disagree
//! with their errors, the floor on relative per-point uncertainties, the effective variance
//! of errors in both variables, and the coverage count of Monte Carlo honesty checks.
//!
//! # Straight line ([`fit_line`])
//!
//! y = a + b x by weighted least squares in closed form, centred on the weighted mean of x
//! so that nothing cancels, with the standard errors of slope and intercept, their
//! covariance, chi-square and R^2.

mod error;
mod line;
mod lm;
mod multi_start;
pub mod quality;
#[cfg(test)]
mod tests;

pub use error::FitError;
pub use line::{fit_line, LineFit};
pub use lm::{minimize, Bounds, LeastSquares, LmFit, LmOptions, Termination};
pub use multi_start::{minimize_multi_start_parallel, MultiStartFit, SameMinimum, StartOutcome, StartSummary};
pub use quality::{
    chi_square_p_value, effective_uncertainty, floored_relative_uncertainty, largest_relative_change, Coverage,
    FitQuality, RELATIVE_UNCERTAINTY_FLOOR,
};
