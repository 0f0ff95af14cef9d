//! Why a density series or a freeze-out fit is refused.
//!
//! Every message names what is wrong (the 0-based point index, the value) and what to change.
//! `Display` is written by hand, as in the other plugins, so that the module needs nothing
//! beyond the standard library and the mobilis crates it builds on.

use std::fmt;

use mobilis_numerics::fit::FitError;

use crate::carrier_type::CarrierType;
use crate::materials::MaterialError;

/// What is wrong with a temperature series of carrier densities (shared by the freeze-out
/// fit and the Arrhenius analysis).
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum SeriesError {
    /// No points at all.
    NoPoints,
    NonFiniteTemperature {
        index: usize,
        value: f64,
    },
    NonPositiveTemperature {
        index: usize,
        value: f64,
    },
    NonFiniteDensity {
        index: usize,
        value: f64,
    },
    NonPositiveDensity {
        index: usize,
        value: f64,
    },
    /// An uncertainty that is not a finite positive number.
    InvalidUncertainty {
        index: usize,
        value: f64,
    },
    /// Some points have uncertainties and others not.
    MixedUncertainties {
        with: usize,
        without: usize,
    },
    /// The carrier type changes within the series.
    CarrierTypeSwitch {
        index: usize,
        temperature_k: f64,
        first: CarrierType,
        then: CarrierType,
    },
    /// The requested carrier type differs from the data's.
    CarrierTypeMismatch {
        requested: CarrierType,
        found: CarrierType,
        index: usize,
    },
    /// Neither the points nor the settings say which carriers these are.
    CarrierTypeUnknown,
    /// The temperature range is not a range.
    InvalidRange {
        min_k: f64,
        max_k: f64,
    },
    /// No point lies in the temperature range.
    RangeExcludesAllData {
        min_k: f64,
        max_k: f64,
        data_min_k: f64,
        data_max_k: f64,
    },
    /// Too few distinct temperatures for the analysis.
    TooFewTemperatures {
        count: usize,
        required: usize,
    },
    /// The Hall factor is not a finite positive number (or the scattering exponent is
    /// outside the range where r_H is defined).
    InvalidHallFactor {
        value: f64,
    },
    /// A single Hall factor was asked of a table that varies with temperature.
    HallFactorVaries,
    /// The Hall factor table has no entries.
    EmptyHallFactorTable,
    /// A Hall factor table entry is not a positive temperature with a positive factor.
    InvalidHallFactorEntry {
        index: usize,
        temperature_k: f64,
        hall_factor: f64,
    },
    /// Two Hall factor table entries at one temperature.
    RepeatedHallFactorTemperature {
        temperature_k: f64,
    },
    /// A systematic density uncertainty that is not a finite number of 0 or more.
    InvalidSystematicUncertainty {
        index: usize,
        value: f64,
    },
    /// A temperature uncertainty that is not a finite number of 0 or more.
    InvalidTemperatureUncertainty {
        index: usize,
        value: f64,
    },
    /// The Hall factor said to be applied to a point is not a finite positive number.
    InvalidAppliedHallFactor {
        index: usize,
        value: f64,
    },
    /// Some points have a temperature uncertainty, others not, and none is stated.
    MissingTemperatureUncertainty {
        index: usize,
        with: usize,
        without: usize,
    },
}

impl fmt::Display for SeriesError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SeriesError::NoPoints => write!(f, "the series is empty; give carrier densities at four or more temperatures"),
            SeriesError::NonFiniteTemperature { index, value } => {
                write!(f, "point {index}: temperature_K is {value}; give a finite temperature in kelvin")
            }
            SeriesError::NonPositiveTemperature { index, value } => write!(
                f,
                "point {index}: temperature_K is {value}; give the absolute temperature in kelvin, above 0 (degC + 273.15)"
            ),
            SeriesError::NonFiniteDensity { index, value } => {
                write!(f, "point {index}: density_m3 is {value}; give a finite carrier density in m^-3, or drop the point")
            }
            SeriesError::NonPositiveDensity { index, value } => write!(
                f,
                "point {index}: density_m3 is {value}; give the carrier density as a positive magnitude in m^-3 (the carrier type is given separately)"
            ),
            SeriesError::InvalidUncertainty { index, value } => write!(
                f,
                "point {index}: density_m3_unc is {value}; give a finite positive standard uncertainty, or leave every uncertainty out"
            ),
            SeriesError::MixedUncertainties { with, without } => write!(
                f,
                "{with} points have a density uncertainty and {without} have none; give an uncertainty for every point or for none"
            ),
            SeriesError::CarrierTypeSwitch {
                index,
                temperature_k,
                first,
                then,
            } => write!(
                f,
                "the carrier type changes from {first} to {then} at point {index} ({temperature_k} K); a freeze-out analysis needs one carrier type, so restrict temperature_min_K and temperature_max_K to one side of the change"
            ),
            SeriesError::CarrierTypeMismatch { requested, found, index } => write!(
                f,
                "carrier_type {requested} was requested but point {index} is {found}-type; drop carrier_type to take it from the data, or check the series"
            ),
            SeriesError::CarrierTypeUnknown => write!(
                f,
                "no carrier type is known for this series; give carrier_type (\"n\" or \"p\") or a carrier_type for the points"
            ),
            SeriesError::InvalidRange { min_k, max_k } => write!(
                f,
                "the temperature range is [{min_k}, {max_k}] K; give temperature_min_K >= 0 and temperature_max_K >= temperature_min_K (either alone leaves that side open)"
            ),
            SeriesError::RangeExcludesAllData {
                min_k,
                max_k,
                data_min_k,
                data_max_k,
            } => write!(
                f,
                "the temperature range [{min_k}, {max_k}] K (temperature_min_K, temperature_max_K) contains no point (the data span {data_min_k} K to {data_max_k} K); widen or move the range"
            ),
            SeriesError::TooFewTemperatures { count, required } => write!(
                f,
                "{count} distinct temperatures cannot determine the fit; give at least {required} (widen temperature_min_K..temperature_max_K or add measurements)"
            ),
            SeriesError::InvalidHallFactor { value } => write!(
                f,
                "the Hall factor is {value}; give a finite positive factor, or a scattering exponent above -1.25"
            ),
            SeriesError::HallFactorVaries => write!(
                f,
                "the Hall factor table varies with temperature, so it has no single value; give hall_factor for a constant factor"
            ),
            SeriesError::EmptyHallFactorTable => write!(
                f,
                "hall_factor_table is empty; give at least one [temperature_K, hall_factor] pair"
            ),
            SeriesError::InvalidHallFactorEntry {
                index,
                temperature_k,
                hall_factor,
            } => write!(
                f,
                "hall_factor_table entry {index} is [{temperature_k}, {hall_factor}]; give a temperature above 0 K and a finite positive Hall factor"
            ),
            SeriesError::RepeatedHallFactorTemperature { temperature_k } => write!(
                f,
                "hall_factor_table gives two factors at {temperature_k} K; give one factor per temperature"
            ),
            SeriesError::InvalidSystematicUncertainty { index, value } => write!(
                f,
                "point {index}: density_m3_unc_sys is {value}; give a finite standard uncertainty of 0 or more, or leave the column out"
            ),
            SeriesError::InvalidTemperatureUncertainty { index, value } => write!(
                f,
                "point {index}: temperature_K_unc is {value}; give a finite standard uncertainty in kelvin, 0 or more"
            ),
            SeriesError::InvalidAppliedHallFactor { index, value } => write!(
                f,
                "point {index}: hall_factor (the factor already applied) is {value}; give a finite positive factor, or leave the column out for 1"
            ),
            SeriesError::MissingTemperatureUncertainty { index, with, without } => write!(
                f,
                "{with} points have a temperature_K_unc and {without} have none (the first is point {index}); fill the column, or give temperature_uncertainty_K for the points without one"
            ),
        }
    }
}

impl std::error::Error for SeriesError {}

/// Why `fit_freeze_out` refuses its input or cannot fit it.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum FreezeOutError {
    /// The density series is not usable.
    Series(SeriesError),
    /// The material is not physical.
    Material(MaterialError),
    /// A setting is out of range.
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The data do not determine these parameters at the best fit.
    Undetermined { parameters: Vec<&'static str> },
    /// The fit failed for another reason.
    Fit(FitError),
}

impl fmt::Display for FreezeOutError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FreezeOutError::Series(error) => error.fmt(f),
            FreezeOutError::Material(error) => error.fmt(f),
            FreezeOutError::InvalidSetting {
                setting,
                value,
                requirement,
            } => write!(f, "{setting} is {value}; {requirement}"),
            FreezeOutError::Undetermined { parameters } => write!(
                f,
                "the data do not determine the {} (the fit is singular there); extend the temperature range into deeper freeze-out or up to the saturation plateau",
                parameters.join(" and ")
            ),
            FreezeOutError::Fit(error) => write!(f, "the freeze-out fit failed: {error}"),
        }
    }
}

impl std::error::Error for FreezeOutError {}

impl From<SeriesError> for FreezeOutError {
    fn from(error: SeriesError) -> Self {
        FreezeOutError::Series(error)
    }
}

impl From<MaterialError> for FreezeOutError {
    fn from(error: MaterialError) -> Self {
        FreezeOutError::Material(error)
    }
}
