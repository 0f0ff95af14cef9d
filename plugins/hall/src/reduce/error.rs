//! Why a reduction is refused, and why a single reading is invalid.
//!
//! Every message names what is wrong (the 0-based reading index, the sample, the value) and
//! what to change. `Display` and `std::error::Error` are written out by hand so that the
//! module needs nothing beyond the standard library and the mobilis crates it builds on.

use std::fmt;

use mobilis_physics::contacts::ContactError;

/// What is wrong with one reading. Carried by [`ReduceError::InvalidReading`], and turned
/// into a warning when the reading is skipped.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ReadingProblem {
    /// `temperature_K` is NaN or infinite.
    NonFiniteTemperature(f64),
    /// `temperature_K` is zero or negative.
    NonPositiveTemperature(f64),
    /// `field_T` is NaN or infinite.
    NonFiniteField(f64),
    /// `current_A` is NaN or infinite.
    NonFiniteCurrent(f64),
    /// `current_A` is exactly zero: V/I is undefined.
    ZeroCurrent,
    /// `voltage_V` is NaN or infinite.
    NonFiniteVoltage(f64),
    /// The contacts are not a configuration of the sample's geometry.
    Contacts {
        error: ContactError,
        geometry: &'static str,
    },
}

impl fmt::Display for ReadingProblem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ReadingProblem::NonFiniteTemperature(value) => {
                write!(f, "temperature_K is {value}; give a finite temperature in kelvin")
            }
            ReadingProblem::NonPositiveTemperature(value) => write!(
                f,
                "temperature_K is {value}; give the absolute temperature in kelvin, above 0 (degC + 273.15)"
            ),
            ReadingProblem::NonFiniteField(value) => {
                write!(
                    f,
                    "field_T is {value}; give a finite field in tesla (0 for a zero-field reading)"
                )
            }
            ReadingProblem::NonFiniteCurrent(value) => {
                write!(f, "current_A is {value}; give the finite source current in ampere")
            }
            ReadingProblem::ZeroCurrent => write!(
                f,
                "current_A is 0; a four-terminal resistance needs a nonzero current, so drop this reading"
            ),
            ReadingProblem::NonFiniteVoltage(value) => write!(
                f,
                "voltage_V is {value}; give the finite measured voltage in volt, or drop an overloaded reading"
            ),
            ReadingProblem::Contacts { error, geometry } => {
                let other = if *geometry == "van_der_pauw" {
                    "a Hall bar"
                } else {
                    "a van der Pauw sample"
                };
                write!(
                    f,
                    "{error} (the sample is measured as {geometry}; declare it {other} in the sample sheet if it is one)"
                )
            }
        }
    }
}

/// Why `hall.reduce` refuses its input.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ReduceError {
    /// One reading is unusable and `skip_invalid_readings` is off.
    InvalidReading {
        /// 0-based index of the reading in the input.
        row: usize,
        sample: String,
        problem: ReadingProblem,
    },
    /// Samples that have readings but no row in the given sample sheet (sorted).
    SamplesMissingFromSheet { samples: Vec<String> },
    /// The sample sheet names a sample twice.
    DuplicateSample { sample: String },
    /// `thickness_m` is zero, negative or not finite.
    InvalidThickness { sample: String, thickness_m: f64 },
    /// `thickness_unc_m` is negative or not finite.
    InvalidThicknessUncertainty { sample: String, thickness_unc_m: f64 },
    /// `hall_factor` is zero, negative or not finite.
    InvalidHallFactor { sample: String, hall_factor: f64 },
    /// A calibration column of the sample sheet is negative or not finite.
    InvalidSampleCalibration {
        sample: String,
        column: &'static str,
        value: f64,
    },
    /// A Hall bar's length or width is zero, negative or not finite.
    InvalidHallBarDimensions {
        sample: String,
        length_m: f64,
        width_m: f64,
    },
    /// A setting is out of its range.
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The columns given to `reduce_columns` differ in length.
    ColumnLengthMismatch {
        column: &'static str,
        length: usize,
        expected: usize,
    },
    /// Nothing left to reduce.
    NoValidReadings { total: usize, skipped: usize },
}

impl fmt::Display for ReduceError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ReduceError::InvalidReading { row, sample, problem } => write!(
                f,
                "reading {row} (sample {sample:?}): {problem}; or set skip_invalid_readings to drop invalid readings with a warning"
            ),
            ReduceError::SamplesMissingFromSheet { samples } => {
                let names: Vec<String> = samples.iter().map(|name| format!("{name:?}")).collect();
                write!(
                    f,
                    "sample(s) {} have readings but no row in the sample sheet; add them to the sheet (thickness_m null for a 2D sheet) or leave the sheet out",
                    names.join(", ")
                )
            }
            ReduceError::DuplicateSample { sample } => {
                write!(f, "sample {sample:?} appears more than once in the sample sheet; keep one row per sample")
            }
            ReduceError::InvalidThickness { sample, thickness_m } => write!(
                f,
                "thickness_m of sample {sample:?} is {thickness_m}; give a positive thickness in metres, or null for a 2D sheet"
            ),
            ReduceError::InvalidThicknessUncertainty { sample, thickness_unc_m } => write!(
                f,
                "thickness_unc_m of sample {sample:?} is {thickness_unc_m}; give a non-negative standard uncertainty in metres, or null"
            ),
            ReduceError::InvalidHallFactor { sample, hall_factor } => write!(
                f,
                "hall_factor of sample {sample:?} is {hall_factor}; give a positive Hall scattering factor (1 when unknown)"
            ),
            ReduceError::InvalidSampleCalibration { sample, column, value } => write!(
                f,
                "{column} of sample {sample:?} is {value}; give a finite standard uncertainty of 0 or more (relative for the scales, in K for the thermometer), or null to use the call's value"
            ),
            ReduceError::InvalidHallBarDimensions {
                sample,
                length_m,
                width_m,
            } => write!(
                f,
                "Hall bar {sample:?} has length {length_m} m and width {width_m} m; give the positive distance between the longitudinal voltage contacts and the bar width, in metres"
            ),
            ReduceError::InvalidSetting {
                setting,
                value,
                requirement,
            } => write!(f, "setting {setting} is {value}; {requirement}"),
            ReduceError::ColumnLengthMismatch {
                column,
                length,
                expected,
            } => write!(
                f,
                "column {column} has {length} values but the sample column has {expected}; give every reading column the same length"
            ),
            ReduceError::NoValidReadings { total: 0, .. } => {
                write!(f, "the readings table is empty; give at least one four-terminal reading")
            }
            ReduceError::NoValidReadings { total, skipped } => write!(
                f,
                "all {total} readings are invalid ({skipped} skipped); see the warnings and correct the readings"
            ),
        }
    }
}

impl std::error::Error for ReduceError {}
