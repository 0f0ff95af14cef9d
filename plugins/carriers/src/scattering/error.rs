//! Why `carriers.mobility_scattering` refuses its input.
//!
//! Every message names the offending point (0-based index in the order given) or setting,
//! its value, and what to change. `Display` and `std::error::Error` are written by hand so
//! that the module needs nothing beyond the standard library and the mobilis crates it builds on.

use std::fmt;

/// Why a mobility-scattering fit is refused or fails.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ScatteringError {
    /// A temperature is NaN, infinite, zero or negative.
    InvalidTemperature { index: usize, value: f64 },
    /// A temperature uncertainty inside the fitted range is NaN, infinite or negative.
    InvalidTemperatureUncertainty { index: usize, value: f64 },
    /// A mobility inside the fitted range is NaN, infinite, zero or negative.
    InvalidMobility { index: usize, value: f64 },
    /// A mobility uncertainty inside the fitted range is NaN, infinite, zero or negative.
    InvalidMobilityUncertainty { index: usize, value: f64 },
    /// Some points inside the fitted range carry an uncertainty and others do not.
    MixedUncertainties { with: usize, without: usize },
    /// A carrier density is NaN, infinite, zero or negative.
    InvalidCarrierDensity { index: usize, value: f64 },
    /// The chosen model needs the measured carrier density at every point it fits.
    MissingCarrierDensity { index: usize, needed_by: &'static str },
    /// The temperature range leaves no point to fit.
    RangeExcludesAllData {
        minimum_k: Option<f64>,
        maximum_k: Option<f64>,
        data_minimum_k: f64,
        data_maximum_k: f64,
    },
    /// Fewer points than the fit needs (one more than the free parameters, so that the
    /// scatter of the residuals can be estimated).
    TooFewPoints { points: usize, parameters: usize },
    /// A setting is outside its range.
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// Two terms of the model that the data cannot tell apart were both requested.
    IndistinguishableTerms(&'static str),
    /// The least-squares solver failed.
    FitFailed(String),
}

impl fmt::Display for ScatteringError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ScatteringError::InvalidTemperature { index, value } => write!(
                f,
                "point {index}: temperature_K is {value}; give the absolute temperature in kelvin, finite and above 0"
            ),
            ScatteringError::InvalidTemperatureUncertainty { index, value } => write!(
                f,
                "point {index}: temperature_K_unc is {value} K; give a finite standard uncertainty of 0 or more, or \
                 leave it out"
            ),
            ScatteringError::InvalidMobility { index, value } => write!(
                f,
                "point {index}: mobility is {value} m^2/(V s); give the finite, positive mobility magnitude, or move the \
                 temperature range to exclude this point"
            ),
            ScatteringError::InvalidMobilityUncertainty { index, value } => write!(
                f,
                "point {index}: the mobility uncertainty is {value} m^2/(V s); give a finite positive standard \
                 uncertainty, or leave every uncertainty out for an unweighted fit"
            ),
            ScatteringError::MixedUncertainties { with, without } => write!(
                f,
                "{with} points carry a mobility uncertainty and {without} do not; give an uncertainty for every fitted \
                 point or for none (an unweighted fit)"
            ),
            ScatteringError::InvalidCarrierDensity { index, value } => write!(
                f,
                "point {index}: the carrier density is {value} m^-3; give a finite positive density, or leave it out"
            ),
            ScatteringError::MissingCarrierDensity { index, needed_by } => write!(
                f,
                "point {index} has no carrier density, which {needed_by} needs at every fitted point; give the \
                 measured density or choose another model"
            ),
            ScatteringError::RangeExcludesAllData {
                minimum_k,
                maximum_k,
                data_minimum_k,
                data_maximum_k,
            } => {
                let show = |bound: &Option<f64>| bound.map_or_else(|| "none".to_string(), |value| format!("{value} K"));
                write!(
                    f,
                    "the temperature range (minimum {}, maximum {}) contains none of the data, which span \
                     {data_minimum_k} K to {data_maximum_k} K; widen the range",
                    show(minimum_k),
                    show(maximum_k)
                )
            }
            ScatteringError::TooFewPoints { points, parameters } => write!(
                f,
                "{points} points are in the fitted range but the model has {parameters} free parameters; give at \
                 least {} points, widen the temperature range, fix the lattice exponent or drop an optional term",
                parameters + 1
            ),
            ScatteringError::InvalidSetting {
                setting,
                value,
                requirement,
            } => write!(f, "{setting} is {value}; {requirement}"),
            ScatteringError::IndistinguishableTerms(why) => write!(f, "{why}"),
            ScatteringError::FitFailed(why) => write!(f, "the mobility fit failed: {why}"),
        }
    }
}

impl std::error::Error for ScatteringError {}

impl From<crate::purity::PurityError> for ScatteringError {
    /// An invalid freeze-out density or tolerance is an invalid setting of this analysis.
    fn from(error: crate::purity::PurityError) -> Self {
        match error {
            crate::purity::PurityError::InvalidInput {
                name,
                value,
                requirement,
            } => ScatteringError::InvalidSetting {
                setting: name,
                value,
                requirement,
            },
        }
    }
}
