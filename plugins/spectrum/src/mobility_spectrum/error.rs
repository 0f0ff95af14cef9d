//! Why a mobility spectrum is refused or could not be computed.
//!
//! Every message names what is wrong (the 0-based point, the value) and what to change.

use mobilis_physics::sweep::SweepError;
use mobilis_sdk::sdk::AnalysisError;

/// Why `spectrum.mobility` refuses its input or stops.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SpectrumError {
    /// No conductivity points at all.
    #[error(
        "no conductivity points were given; give sigma_xx and sigma_xy at several fields from 0 to the highest field"
    )]
    NoPoints,
    /// A field, conductivity or uncertainty is NaN or infinite.
    #[error("point {index}: {quantity} is {value}; give a finite number or drop the point")]
    NonFinite {
        index: usize,
        quantity: &'static str,
        value: f64,
    },
    /// A negative field: the spectrum takes symmetrized data, given at |B|.
    #[error(
        "point {index}: field_T is {field_t}; the mobility spectrum takes a symmetrized sweep at |B| >= 0, so symmetrize the sweep in field first"
    )]
    NegativeField { index: usize, field_t: f64 },
    /// sigma_xx <= 0, which no passive sample has (it follows from rho_xx <= 0).
    #[error(
        "point {index} (B = {field_t} T): sigma_xx is {sigma_xx_s} S; a passive sample has positive sigma_xx (positive rho_xx), so check the voltage polarity and the units, or drop the point"
    )]
    NonPositiveConductivity {
        index: usize,
        field_t: f64,
        sigma_xx_s: f64,
    },
    /// An uncertainty that is zero, negative, or a correlation outside (-1, 1).
    #[error(
        "point {index}: the uncertainty {quantity} is {value}; give a finite positive standard uncertainty (a correlation within (-1, 1))"
    )]
    InvalidUncertainty {
        index: usize,
        quantity: &'static str,
        value: f64,
    },
    /// Some points carry uncertainties and some do not.
    #[error("{with} points have uncertainties and {without} do not; give uncertainties for every point or for none")]
    MixedUncertainties { with: usize, without: usize },
    /// Too few distinct nonzero fields to resolve anything in mobility.
    #[error(
        "the data hold {distinct} distinct nonzero fields; a mobility spectrum needs at least {required}, because its resolution in mobility comes from the field dependence, so measure more fields"
    )]
    TooFewFields { distinct: usize, required: usize },
    /// A setting out of its range.
    #[error("setting {setting} is {value}; {requirement}")]
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The discrepancy principle was asked for, but the data carry no uncertainties.
    #[error(
        "the discrepancy principle needs uncertainties on the data; give rho_xx and rho_xy uncertainties, or choose the L-curve or the automatic rule"
    )]
    DiscrepancyNeedsUncertainties,
    /// The sweep could not be symmetrized or converted.
    #[error("{0}")]
    Sweep(#[from] SweepError),
    /// The client asked to stop.
    #[error("cancelled by the client")]
    Cancelled,
    /// Valid input, but a solve failed.
    #[error("{0}")]
    Numerical(String),
}

/// For the plugin glue: cancellation and solver failures keep their kind, everything else
/// is bad input.
impl From<SpectrumError> for AnalysisError {
    fn from(error: SpectrumError) -> Self {
        match error {
            SpectrumError::Cancelled => AnalysisError::Cancelled,
            SpectrumError::Numerical(message) => AnalysisError::Numerical(message),
            other => AnalysisError::InvalidInput(other.to_string()),
        }
    }
}
