//! Why `carriers.mobility_scattering` refuses its input.
//!
//! Every message names the offending point (0-based index in the order given) or setting,
//! its value, and what to change. `Display` and `std::error::Error` are derived with
//! `thiserror`; computed text comes from the small functions at the end.

/// Why a mobility-scattering fit is refused or fails.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ScatteringError {
    /// A temperature is NaN, infinite, zero or negative.
    #[error("point {index}: temperature_K is {value}; give the absolute temperature in kelvin, finite and above 0")]
    InvalidTemperature { index: usize, value: f64 },
    /// A temperature uncertainty inside the fitted range is NaN, infinite or negative.
    #[error(
        "point {index}: temperature_K_unc is {value} K; give a finite standard uncertainty of 0 or more, or \
         leave it out"
    )]
    InvalidTemperatureUncertainty { index: usize, value: f64 },
    /// A mobility inside the fitted range is NaN, infinite, zero or negative.
    #[error(
        "point {index}: mobility is {value} m^2/(V s); give the finite, positive mobility magnitude, or move the \
         temperature range to exclude this point"
    )]
    InvalidMobility { index: usize, value: f64 },
    /// A mobility uncertainty inside the fitted range is NaN, infinite, zero or negative.
    #[error(
        "point {index}: the mobility uncertainty is {value} m^2/(V s); give a finite positive standard \
         uncertainty, or leave every uncertainty out for an unweighted fit"
    )]
    InvalidMobilityUncertainty { index: usize, value: f64 },
    /// Some points inside the fitted range carry an uncertainty and others do not.
    #[error(
        "{with} points carry a mobility uncertainty and {without} do not; give an uncertainty for every fitted \
         point or for none (an unweighted fit)"
    )]
    MixedUncertainties { with: usize, without: usize },
    /// A carrier density is NaN, infinite, zero or negative.
    #[error("point {index}: the carrier density is {value} m^-3; give a finite positive density, or leave it out")]
    InvalidCarrierDensity { index: usize, value: f64 },
    /// The chosen model needs the measured carrier density at every point it fits.
    #[error(
        "point {index} has no carrier density, which {needed_by} needs at every fitted point; give the \
         measured density or choose another model"
    )]
    MissingCarrierDensity { index: usize, needed_by: &'static str },
    /// The temperature range leaves no point to fit.
    #[error(
        "the temperature range (minimum {}, maximum {}) contains none of the data, which span \
         {data_minimum_k} K to {data_maximum_k} K; widen the range",
        bound_text(.minimum_k),
        bound_text(.maximum_k)
    )]
    RangeExcludesAllData {
        minimum_k: Option<f64>,
        maximum_k: Option<f64>,
        data_minimum_k: f64,
        data_maximum_k: f64,
    },
    /// Fewer points than the fit needs (one more than the free parameters, so that the
    /// scatter of the residuals can be estimated).
    #[error(
        "{points} points are in the fitted range but the model has {parameters} free parameters; give at \
         least {} points, widen the temperature range, fix the lattice exponent or drop an optional term",
        .parameters + 1
    )]
    TooFewPoints { points: usize, parameters: usize },
    /// A setting is outside its range.
    #[error("{setting} is {value}; {requirement}")]
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// Two terms of the model that the data cannot tell apart were both requested.
    #[error("{0}")]
    IndistinguishableTerms(&'static str),
    /// The least-squares solver failed.
    #[error("the mobility fit failed: {0}")]
    FitFailed(String),
}

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

/// A temperature bound as the message shows it: in kelvin, or "none" when it is open.
fn bound_text(bound: &Option<f64>) -> String {
    bound.map_or_else(|| "none".to_string(), |value| format!("{value} K"))
}
