//! Why a multi-carrier fit is refused or fails.
//!
//! Every message names what is wrong (the 0-based point, the value, the carriers) and what
//! to change.

use mobilis_numerics::fit::FitError;
use mobilis_physics::forward::tensor::CarrierKind;
use mobilis_physics::sweep::SweepError;
use mobilis_physics::tensor_data::TensorDataError;

/// Why `fit_carriers` or `fit_sweep` refuses its input or finds no fit.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum MultiCarrierError {
    /// The sweep could not be symmetrized (one field sign only, rho_xx <= 0, NaN ...).
    #[error("{0}")]
    Sweep(#[from] SweepError),
    /// No points at all.
    #[error("no conductivity points were given; give sigma_xx and sigma_xy over a field sweep")]
    NoPoints,
    /// A value is NaN or infinite.
    #[error("point {index}: {column} is {value}; give a finite number or drop the point")]
    NonFinite {
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// sigma_xx is zero or negative.
    #[error(
        "point {index}: sigma_xx is {value} S; a conducting sample has sigma_xx > 0, so check the sign and the units of rho_xx, or drop the point"
    )]
    NonPositiveSigmaXx { index: usize, value: f64 },
    /// An uncertainty is not a finite positive number, or a correlation not within (-1, 1).
    #[error(
        "point {index}: {column} is {value}; give finite positive standard uncertainties and a correlation within (-1, 1)"
    )]
    InvalidUncertainty {
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// Some points have uncertainties and others not.
    #[error("{with} points have uncertainties and {without} do not; give uncertainties for every point or for none")]
    MixedUncertainties { with: usize, without: usize },
    /// Every point is at zero field.
    #[error(
        "all {points} points are at zero field; carriers are told apart by the field dependence of the conductivity, so give a field sweep"
    )]
    NoField { points: usize },
    /// Fewer residuals than the parameters of the carriers asked for.
    #[error(
        "{points} field points give {residuals} residuals (sigma_xx and sigma_xy, sigma_xx only at zero field), but {carriers} carrier(s) need at least {}{}; give more field points or fit fewer carriers",
        residuals_needed(.carriers, .weighted),
        without_uncertainties(.weighted)
    )]
    TooFewPoints {
        points: usize,
        residuals: usize,
        carriers: usize,
        weighted: bool,
    },
    /// An empty carrier list.
    #[error("the carrier list is empty; give at least one carrier kind, or choose automatic selection")]
    NoCarriers,
    /// A guessed carrier with a density or mobility that is not finite and positive.
    #[error("guessed carrier {index}: {what} is {value}; give a finite positive starting value")]
    InvalidGuess {
        index: usize,
        what: &'static str,
        value: f64,
    },
    /// A setting out of its range.
    #[error("setting {name} is {value}; {requirement}")]
    InvalidSetting {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The data do not determine the parameters of these carriers.
    #[error(
        "the data do not determine carriers {carriers:?} of {}: their contributions cannot be told apart in this field range; fit fewer carriers, or measure to higher field",
        kinds_text(.kinds)
    )]
    Indistinguishable {
        kinds: Vec<CarrierKind>,
        carriers: Vec<usize>,
    },
    /// No start converged.
    #[error(
        "none of {starts} starts of the fit of {} converged within {max_iterations} iterations; raise max_iterations or starts, or fit fewer carriers",
        kinds_text(.kinds)
    )]
    NotConverged {
        kinds: Vec<CarrierKind>,
        starts: usize,
        max_iterations: usize,
    },
    /// Any other failure of the least-squares solver.
    #[error("the fit of {} failed: {error}", kinds_text(.kinds))]
    Fit { kinds: Vec<CarrierKind>, error: FitError },
    /// The caller asked to stop between two candidate carrier lists.
    #[error("cancelled by the client")]
    Cancelled,
}

/// Residuals `carriers` carriers need: two parameters each, and the noise scale without
/// uncertainties.
fn residuals_needed(carriers: &usize, weighted: &bool) -> usize {
    if *weighted {
        2 * carriers
    } else {
        2 * carriers + 1
    }
}

fn without_uncertainties(weighted: &bool) -> &'static str {
    if *weighted {
        ""
    } else {
        " without uncertainties"
    }
}

fn kinds_text(kinds: &[CarrierKind]) -> String {
    let names: Vec<&str> = kinds.iter().map(|k| k.name()).collect();
    format!("[{}]", names.join(", "))
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
