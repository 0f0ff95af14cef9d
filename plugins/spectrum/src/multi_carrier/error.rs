//! Why a multi-carrier fit is refused or fails.
//!
//! Every message names what is wrong (the 0-based point, the value, the carriers) and what
//! to change. `Display` is written by hand, as in the other plugins, so that the module
//! needs nothing beyond the standard library and the mobilis crates it builds on.

use std::fmt;

use mobilis_numerics::fit::FitError;
use mobilis_physics::forward::tensor::CarrierKind;
use mobilis_physics::sweep::SweepError;
use mobilis_physics::tensor_data::TensorDataError;

/// Why `fit_carriers` or `fit_sweep` refuses its input or finds no fit.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum MultiCarrierError {
    /// The sweep could not be symmetrized (one field sign only, rho_xx <= 0, NaN ...).
    Sweep(SweepError),
    /// No points at all.
    NoPoints,
    /// A value is NaN or infinite.
    NonFinite {
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// sigma_xx is zero or negative.
    NonPositiveSigmaXx { index: usize, value: f64 },
    /// An uncertainty is not a finite positive number, or a correlation not within (-1, 1).
    InvalidUncertainty {
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// Some points have uncertainties and others not.
    MixedUncertainties { with: usize, without: usize },
    /// Every point is at zero field.
    NoField { points: usize },
    /// Fewer residuals than the parameters of the carriers asked for.
    TooFewPoints {
        points: usize,
        residuals: usize,
        carriers: usize,
        weighted: bool,
    },
    /// An empty carrier list.
    NoCarriers,
    /// A guessed carrier with a density or mobility that is not finite and positive.
    InvalidGuess {
        index: usize,
        what: &'static str,
        value: f64,
    },
    /// A setting out of its range.
    InvalidSetting {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The data do not determine the parameters of these carriers.
    Indistinguishable {
        kinds: Vec<CarrierKind>,
        carriers: Vec<usize>,
    },
    /// No start converged.
    NotConverged {
        kinds: Vec<CarrierKind>,
        starts: usize,
        max_iterations: usize,
    },
    /// Any other failure of the least-squares solver.
    Fit { kinds: Vec<CarrierKind>, error: FitError },
    /// The caller asked to stop between two candidate carrier lists.
    Cancelled,
}

fn kinds_text(kinds: &[CarrierKind]) -> String {
    let names: Vec<&str> = kinds.iter().map(|k| k.name()).collect();
    format!("[{}]", names.join(", "))
}

impl fmt::Display for MultiCarrierError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            MultiCarrierError::Sweep(error) => write!(f, "{error}"),
            MultiCarrierError::Cancelled => write!(f, "cancelled by the client"),
            MultiCarrierError::NoPoints => {
                write!(f, "no conductivity points were given; give sigma_xx and sigma_xy over a field sweep")
            }
            MultiCarrierError::NonFinite { index, column, value } => {
                write!(f, "point {index}: {column} is {value}; give a finite number or drop the point")
            }
            MultiCarrierError::NonPositiveSigmaXx { index, value } => write!(
                f,
                "point {index}: sigma_xx is {value} S; a conducting sample has sigma_xx > 0, so check the sign and the units of rho_xx, or drop the point"
            ),
            MultiCarrierError::InvalidUncertainty { index, column, value } => write!(
                f,
                "point {index}: {column} is {value}; give finite positive standard uncertainties and a correlation within (-1, 1)"
            ),
            MultiCarrierError::MixedUncertainties { with, without } => write!(
                f,
                "{with} points have uncertainties and {without} do not; give uncertainties for every point or for none"
            ),
            MultiCarrierError::NoField { points } => write!(
                f,
                "all {points} points are at zero field; carriers are told apart by the field dependence of the conductivity, so give a field sweep"
            ),
            MultiCarrierError::TooFewPoints {
                points,
                residuals,
                carriers,
                weighted,
            } => {
                let needed = if *weighted { 2 * carriers } else { 2 * carriers + 1 };
                write!(
                    f,
                    "{points} field points give {residuals} residuals (sigma_xx and sigma_xy, sigma_xx only at zero field), but {carriers} carrier(s) need at least {needed}{}; give more field points or fit fewer carriers",
                    if *weighted { "" } else { " without uncertainties" }
                )
            }
            MultiCarrierError::NoCarriers => {
                write!(f, "the carrier list is empty; give at least one carrier kind, or choose automatic selection")
            }
            MultiCarrierError::InvalidGuess { index, what, value } => write!(
                f,
                "guessed carrier {index}: {what} is {value}; give a finite positive starting value"
            ),
            MultiCarrierError::InvalidSetting {
                name,
                value,
                requirement,
            } => write!(f, "setting {name} is {value}; {requirement}"),
            MultiCarrierError::Indistinguishable { kinds, carriers } => write!(
                f,
                "the data do not determine carriers {carriers:?} of {}: their contributions cannot be told apart in this field range; fit fewer carriers, or measure to higher field",
                kinds_text(kinds)
            ),
            MultiCarrierError::NotConverged {
                kinds,
                starts,
                max_iterations,
            } => write!(
                f,
                "none of {starts} starts of the fit of {} converged within {max_iterations} iterations; raise max_iterations or starts, or fit fewer carriers",
                kinds_text(kinds)
            ),
            MultiCarrierError::Fit { kinds, error } => {
                write!(f, "the fit of {} failed: {error}", kinds_text(kinds))
            }
        }
    }
}

impl std::error::Error for MultiCarrierError {}

impl From<SweepError> for MultiCarrierError {
    fn from(error: SweepError) -> Self {
        MultiCarrierError::Sweep(error)
    }
}

impl From<TensorDataError> for MultiCarrierError {
    fn from(error: TensorDataError) -> Self {
        match error {
            TensorDataError::NoPoints => MultiCarrierError::NoPoints,
            TensorDataError::NonFinite { index, column, value } => {
                MultiCarrierError::NonFinite { index, column, value }
            }
            TensorDataError::NonPositiveXx { index, value, .. } => {
                MultiCarrierError::NonPositiveSigmaXx { index, value }
            }
            TensorDataError::InvalidUncertainty { index, column, value } => {
                MultiCarrierError::InvalidUncertainty { index, column, value }
            }
            TensorDataError::MixedUncertainties { with, without } => {
                MultiCarrierError::MixedUncertainties { with, without }
            }
            TensorDataError::NoField { points } => MultiCarrierError::NoField { points },
        }
    }
}

impl MultiCarrierError {
    /// Maps a solver failure for the carrier list `kinds` (parameters 2i and 2i + 1 belong
    /// to carrier i).
    pub(super) fn from_fit(kinds: &[CarrierKind], error: FitError) -> Self {
        match error {
            FitError::Singular { parameters } => {
                let mut carriers: Vec<usize> = parameters.iter().map(|p| p / 2).collect();
                carriers.dedup();
                MultiCarrierError::Indistinguishable {
                    kinds: kinds.to_vec(),
                    carriers,
                }
            }
            FitError::NotConverged {
                starts, max_iterations, ..
            } => MultiCarrierError::NotConverged {
                kinds: kinds.to_vec(),
                starts,
                max_iterations,
            },
            error => MultiCarrierError::Fit {
                kinds: kinds.to_vec(),
                error,
            },
        }
    }
}
