//! Why a mobility spectrum is refused or could not be computed.
//!
//! Every message names what is wrong (the 0-based point, the value) and what to change.
//! `Display` is written out by hand so that the module needs nothing beyond the standard
//! library and the mobilis crates it builds on.

use std::fmt;

use mobilis_physics::sweep::SweepError;
use mobilis_sdk::sdk::AnalysisError;

/// Why `spectrum.mobility` refuses its input or stops.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum SpectrumError {
    /// No conductivity points at all.
    NoPoints,
    /// A field, conductivity or uncertainty is NaN or infinite.
    NonFinite {
        index: usize,
        quantity: &'static str,
        value: f64,
    },
    /// A negative field: the spectrum takes symmetrized data, given at |B|.
    NegativeField { index: usize, field_t: f64 },
    /// sigma_xx <= 0, which no passive sample has (it follows from rho_xx <= 0).
    NonPositiveConductivity {
        index: usize,
        field_t: f64,
        sigma_xx_s: f64,
    },
    /// An uncertainty that is zero, negative, or a correlation outside (-1, 1).
    InvalidUncertainty {
        index: usize,
        quantity: &'static str,
        value: f64,
    },
    /// Some points carry uncertainties and some do not.
    MixedUncertainties { with: usize, without: usize },
    /// Too few distinct nonzero fields to resolve anything in mobility.
    TooFewFields { distinct: usize, required: usize },
    /// A setting out of its range.
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The discrepancy principle was asked for, but the data carry no uncertainties.
    DiscrepancyNeedsUncertainties,
    /// The sweep could not be symmetrized or converted.
    Sweep(SweepError),
    /// The client asked to stop.
    Cancelled,
    /// Valid input, but a solve failed.
    Numerical(String),
}

impl fmt::Display for SpectrumError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SpectrumError::NoPoints => write!(
                f,
                "no conductivity points were given; give sigma_xx and sigma_xy at several fields from 0 to the highest field"
            ),
            SpectrumError::NonFinite { index, quantity, value } => {
                write!(f, "point {index}: {quantity} is {value}; give a finite number or drop the point")
            }
            SpectrumError::NegativeField { index, field_t } => write!(
                f,
                "point {index}: field_T is {field_t}; the mobility spectrum takes a symmetrized sweep at |B| >= 0, so symmetrize the sweep in field first"
            ),
            SpectrumError::NonPositiveConductivity {
                index,
                field_t,
                sigma_xx_s,
            } => write!(
                f,
                "point {index} (B = {field_t} T): sigma_xx is {sigma_xx_s} S; a passive sample has positive sigma_xx (positive rho_xx), so check the voltage polarity and the units, or drop the point"
            ),
            SpectrumError::InvalidUncertainty { index, quantity, value } => write!(
                f,
                "point {index}: the uncertainty {quantity} is {value}; give a finite positive standard uncertainty (a correlation within (-1, 1))"
            ),
            SpectrumError::MixedUncertainties { with, without } => write!(
                f,
                "{with} points have uncertainties and {without} do not; give uncertainties for every point or for none"
            ),
            SpectrumError::TooFewFields { distinct, required } => write!(
                f,
                "the data hold {distinct} distinct nonzero fields; a mobility spectrum needs at least {required}, because its resolution in mobility comes from the field dependence, so measure more fields"
            ),
            SpectrumError::InvalidSetting {
                setting,
                value,
                requirement,
            } => write!(f, "setting {setting} is {value}; {requirement}"),
            SpectrumError::DiscrepancyNeedsUncertainties => write!(
                f,
                "the discrepancy principle needs uncertainties on the data; give rho_xx and rho_xy uncertainties, or choose the L-curve or the automatic rule"
            ),
            SpectrumError::Sweep(error) => write!(f, "{error}"),
            SpectrumError::Cancelled => write!(f, "cancelled by the client"),
            SpectrumError::Numerical(message) => write!(f, "{message}"),
        }
    }
}

impl std::error::Error for SpectrumError {}

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

impl From<SweepError> for SpectrumError {
    fn from(error: SweepError) -> Self {
        SpectrumError::Sweep(error)
    }
}
