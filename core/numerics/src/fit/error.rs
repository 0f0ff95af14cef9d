//! Why a fit is refused or failed: one error type for the solver, the multi-start and the
//! line fit, below all three so that each names it without going through the module root.

use crate::linalg::LinalgError;

/// Why a fit is refused or failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FitError {
    /// The problem has no parameters.
    #[error("the fit has no parameters; give a starting value for each parameter to fit")]
    NoParameters,
    /// More free parameters than residuals (or as many, with unweighted residuals, whose
    /// scatter then cannot be estimated).
    #[error(
        "{parameters} free parameters cannot be fitted to {residuals} residuals; give more data points (more than the parameters when no uncertainties are given) or fix parameters"
    )]
    TooFewResiduals { residuals: usize, parameters: usize },
    /// A per-parameter input has the wrong length.
    #[error("{what} has {got} entries but the problem has {expected} parameters; give one per parameter")]
    LengthMismatch {
        what: &'static str,
        expected: usize,
        got: usize,
    },
    /// A bound pair is NaN or reversed.
    #[error("parameter {index} has bounds [{lower}, {upper}]; give lower <= upper, neither NaN")]
    InvalidBounds { index: usize, lower: f64, upper: f64 },
    /// A starting value is NaN or infinite.
    #[error("the starting value of parameter {index} is {value}; give a finite number")]
    NonFiniteStart { index: usize, value: f64 },
    /// A residual is NaN or infinite at the start.
    #[error(
        "residual {index} is {value} at the starting parameters; start where the model is defined (check the starting values and the data)"
    )]
    NonFiniteResidual { index: usize, value: f64 },
    /// A finite-difference or analytic Jacobian column is not finite.
    #[error(
        "the derivative of the residuals with respect to parameter {parameter} is not finite at {value}; bound the parameter away from where the model breaks down"
    )]
    NonFiniteJacobian { parameter: usize, value: f64 },
    /// The data do not determine some combination of the parameters.
    #[error(
        "the data do not determine parameters {parameters:?} (the Jacobian is singular there); fix one of them with equal bounds, or add data that constrain them"
    )]
    Singular { parameters: Vec<usize> },
    /// No start reached convergence.
    #[error(
        "none of {starts} starts converged within {max_iterations} iterations (best chi-square {best_chi_square:e}); raise max_iterations or give better starting values"
    )]
    NotConverged {
        starts: usize,
        max_iterations: usize,
        best_chi_square: f64,
    },
    /// No starting point was given to a multi-start fit.
    #[error("no starting point was given; give at least one")]
    NoStarts,
    /// A solver option is out of range.
    #[error("option {name} is {value}; {requirement}")]
    InvalidOption {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// A data point of a line fit is not usable.
    #[error("point {index}: {what} is {value}; give finite values and positive finite uncertainties")]
    InvalidPoint {
        index: usize,
        what: &'static str,
        value: f64,
    },
    /// Too few points for a line fit.
    #[error(
        "{points} points cannot fix a line with uncertainties; give at least {required} (3 without uncertainties, so that the scatter can be estimated)"
    )]
    TooFewPoints { points: usize, required: usize },
    /// All x of a line fit are equal.
    #[error("all x values are equal, so no slope can be fitted; give points at two or more distinct x")]
    NoSpread,
    /// A linear-algebra failure (non-finite Jacobian entries, SVD non-convergence).
    #[error(transparent)]
    Linalg(#[from] LinalgError),
}
