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
    /// A value, a sign or an uncertainty of the points that the shared check of tensor data
    /// refuses (`mobilis_physics::tensor_data`, the rule the two-band fit applies too): a
    /// value not finite, sigma_xx <= 0, an invalid uncertainty or correlation, or
    /// uncertainties on some points only. Its message names the point, the column and
    /// what to give.
    #[error("{0}")]
    Data(TensorDataError),
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

/// The shared check's refusals, except the two whose message says what the fit needs:
/// points at all, and points in field.
impl From<TensorDataError> for MultiCarrierError {
    fn from(error: TensorDataError) -> Self {
        match error {
            TensorDataError::NoPoints => MultiCarrierError::NoPoints,
            TensorDataError::NoField { points } => MultiCarrierError::NoField { points },
            other => MultiCarrierError::Data(other),
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
