//! Why a density series or a freeze-out fit is refused.
//!
//! Every message names what is wrong (the 0-based point index, the value) and what to change.
//! `Display` and `std::error::Error` are derived with `thiserror`, as in the other plugins.

use mobilis_numerics::fit::FitError;

use crate::carrier_type::CarrierType;
use crate::materials::MaterialError;

/// What is wrong with a temperature series of carrier densities (shared by the freeze-out
/// fit and the Arrhenius analysis).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SeriesError {
    /// No points at all.
    #[error("the series is empty; give carrier densities at four or more temperatures")]
    NoPoints,
    #[error("point {index}: temperature_K is {value}; give a finite temperature in kelvin")]
    NonFiniteTemperature { index: usize, value: f64 },
    #[error(
        "point {index}: temperature_K is {value}; give the absolute temperature in kelvin, above 0 (degC + 273.15)"
    )]
    NonPositiveTemperature { index: usize, value: f64 },
    #[error("point {index}: density_m3 is {value}; give a finite carrier density in m^-3, or drop the point")]
    NonFiniteDensity { index: usize, value: f64 },
    #[error(
        "point {index}: density_m3 is {value}; give the carrier density as a positive magnitude in m^-3 (the carrier type is given separately)"
    )]
    NonPositiveDensity { index: usize, value: f64 },
    /// An uncertainty that is not a finite positive number.
    #[error(
        "point {index}: density_m3_unc is {value}; give a finite positive standard uncertainty, or leave every uncertainty out"
    )]
    InvalidUncertainty { index: usize, value: f64 },
    /// Some points have uncertainties and others not.
    #[error(
        "{with} points have a density uncertainty and {without} have none; give an uncertainty for every point or for none"
    )]
    MixedUncertainties { with: usize, without: usize },
    /// The carrier type changes within the series.
    #[error(
        "the carrier type changes from {first} to {then} at point {index} ({} K); a freeze-out analysis needs one carrier type, so restrict temperature_min_K and temperature_max_K to one side of the change",
        mobilis_physics::units::format_number(*.temperature_k)
    )]
    CarrierTypeSwitch {
        index: usize,
        temperature_k: f64,
        first: CarrierType,
        then: CarrierType,
    },
    /// The requested carrier type differs from the data's.
    #[error(
        "carrier_type {requested} was requested but point {index} is {found}-type; drop carrier_type to take it from the data, or check the series"
    )]
    CarrierTypeMismatch {
        requested: CarrierType,
        found: CarrierType,
        index: usize,
    },
    /// Neither the points nor the settings say which carriers these are.
    #[error(
        "no carrier type is known for this series; give carrier_type (\"n\" or \"p\") or a carrier_type for the points"
    )]
    CarrierTypeUnknown,
    /// The temperature range is not a range.
    #[error(
        "the temperature range is [{min_k}, {max_k}] K; give temperature_min_K >= 0 and temperature_max_K >= temperature_min_K (either alone leaves that side open)"
    )]
    InvalidRange { min_k: f64, max_k: f64 },
    /// No point lies in the temperature range.
    #[error(
        "the temperature range [{min_k}, {max_k}] K (temperature_min_K, temperature_max_K) contains no point (the data span {data_min_k} K to {data_max_k} K); widen or move the range"
    )]
    RangeExcludesAllData {
        min_k: f64,
        max_k: f64,
        data_min_k: f64,
        data_max_k: f64,
    },
    /// Too few distinct temperatures for the analysis.
    #[error(
        "{count} distinct temperatures cannot determine the fit; give at least {required} (widen temperature_min_K..temperature_max_K or add measurements)"
    )]
    TooFewTemperatures { count: usize, required: usize },
    /// The Hall factor is not a finite positive number (or the scattering exponent is
    /// outside the range where r_H is defined).
    #[error("the Hall factor is {value}; give a finite positive factor, or a scattering exponent above -1.25")]
    InvalidHallFactor { value: f64 },
    /// A single Hall factor was asked of a table that varies with temperature.
    #[error(
        "the Hall factor table varies with temperature, so it has no single value; give hall_factor for a constant factor"
    )]
    HallFactorVaries,
    /// The Hall factor table has no entries.
    #[error("hall_factor_table is empty; give at least one [temperature_K, hall_factor] pair")]
    EmptyHallFactorTable,
    /// A Hall factor table entry is not a positive temperature with a positive factor.
    #[error(
        "hall_factor_table entry {index} is [{temperature_k}, {hall_factor}]; give a temperature above 0 K and a finite positive Hall factor"
    )]
    InvalidHallFactorEntry {
        index: usize,
        temperature_k: f64,
        hall_factor: f64,
    },
    /// Two Hall factor table entries at one temperature.
    #[error("hall_factor_table gives two factors at {temperature_k} K; give one factor per temperature")]
    RepeatedHallFactorTemperature { temperature_k: f64 },
    /// A systematic density uncertainty that is not a finite number of 0 or more.
    #[error(
        "point {index}: density_m3_unc_sys is {value}; give a finite standard uncertainty of 0 or more, or leave the column out"
    )]
    InvalidSystematicUncertainty { index: usize, value: f64 },
    /// A temperature uncertainty that is not a finite number of 0 or more.
    #[error("point {index}: temperature_K_unc is {value}; give a finite standard uncertainty in kelvin, 0 or more")]
    InvalidTemperatureUncertainty { index: usize, value: f64 },
    /// The Hall factor said to be applied to a point is not a finite positive number.
    #[error(
        "point {index}: hall_factor (the factor already applied) is {value}; give a finite positive factor, or leave the column out for 1"
    )]
    InvalidAppliedHallFactor { index: usize, value: f64 },
    /// Some points have a temperature uncertainty, others not, and none is stated.
    #[error(
        "{with} points have a temperature_K_unc and {without} have none (the first is point {index}); fill the column, or give temperature_uncertainty_K for the points without one"
    )]
    MissingTemperatureUncertainty { index: usize, with: usize, without: usize },
}

/// Why `fit_freeze_out` refuses its input or cannot fit it.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FreezeOutError {
    /// The density series is not usable.
    #[error("{0}")]
    Series(SeriesError),
    /// The material is not physical.
    #[error("{0}")]
    Material(MaterialError),
    /// A setting is out of range.
    #[error("{setting} is {value}; {requirement}")]
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The data do not determine these parameters at the best fit.
    #[error(
        "the data do not determine the {} (the fit is singular there); extend the temperature range into deeper freeze-out or up to the saturation plateau",
        .parameters.join(" and ")
    )]
    Undetermined { parameters: Vec<&'static str> },
    /// The fit failed for another reason.
    #[error("the freeze-out fit failed: {0}")]
    Fit(FitError),
}

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
