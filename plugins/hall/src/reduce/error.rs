//! Why a reduction is refused, and why a single reading is invalid.
//!
//! Every message names what is wrong (the 0-based reading index, the sample, the value) and
//! what to change. `Display` and `std::error::Error` are derived with `thiserror`; computed text
//! comes from the small functions at the end.

use mobilis_physics::contacts::ContactError;

/// The largest magnitude of a reading's current, voltage, field and temperature: far
/// beyond any laboratory value (1e30 A, V, T or K), and far enough below the largest
/// double (1.8e308) that the squares and sums of ten million readings stay finite. A
/// reading beyond it is invalid: it can only be a unit or export error.
pub const LARGEST_READING_MAGNITUDE: f64 = 1e30;

/// The smallest |current_A| of a valid reading: far below any current source (1e-30 A),
/// so that V/I of the largest voltage stays finite with room for its square.
pub const SMALLEST_CURRENT_A: f64 = 1e-30;

/// What is wrong with one reading. Carried by [`ReduceError::InvalidReading`], and turned
/// into a warning when the reading is skipped.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ReadingProblem {
    /// `temperature_K` is NaN or infinite.
    #[error("temperature_K is {0}; give a finite temperature in kelvin")]
    NonFiniteTemperature(f64),
    /// `temperature_K` is zero or negative.
    #[error("temperature_K is {0}; give the absolute temperature in kelvin, above 0 (degC + 273.15)")]
    NonPositiveTemperature(f64),
    /// `field_T` is NaN or infinite.
    #[error("field_T is {0}; give a finite field in tesla (0 for a zero-field reading)")]
    NonFiniteField(f64),
    /// `current_A` is NaN or infinite.
    #[error("current_A is {0}; give the finite source current in ampere")]
    NonFiniteCurrent(f64),
    /// `current_A` is exactly zero: V/I is undefined.
    #[error("current_A is 0; a four-terminal resistance needs a nonzero current, so drop this reading")]
    ZeroCurrent,
    /// `voltage_V` is NaN or infinite.
    #[error("voltage_V is {0}; give the finite measured voltage in volt, or drop an overloaded reading")]
    NonFiniteVoltage(f64),
    /// A magnitude beyond [`LARGEST_READING_MAGNITUDE`]:
    /// no laboratory value, and its squares and sums would overflow.
    #[error(
        "{column} is {value:e}, beyond the {largest:e} {unit} the reduction can square and sum without overflow; check the column's unit (dataset.import units) or drop the reading",
        largest = LARGEST_READING_MAGNITUDE
    )]
    BeyondRange {
        column: &'static str,
        value: f64,
        unit: &'static str,
    },
    /// |`current_A`| below [`SMALLEST_CURRENT_A`]: no source
    /// current, and V/I would overflow.
    #[error(
        "current_A is {0:e}, below the {smallest:e} A of any current source, where V/I overflows; check the column's unit (dataset.import units) or drop the reading",
        smallest = SMALLEST_CURRENT_A
    )]
    CurrentTooSmall(f64),
    /// Contact cells are empty: the columns named, or the `contacts` cell.
    #[error(
        "{} empty; give every reading its contacts (i_in, i_out, v_pos, v_neg, or contacts in pair notation such as \"21,34\"), or drop the reading",
        empty_contacts(.0)
    )]
    EmptyContacts(Vec<&'static str>),
    /// The contacts are not a configuration of the sample's geometry.
    #[error(
        "{error} (the sample is measured as {geometry}; declare it {} in the sample sheet if it is one)",
        other_geometry(.geometry)
    )]
    Contacts {
        error: ContactError,
        geometry: &'static str,
    },
}

/// Why `hall.reduce` refuses its input.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ReduceError {
    /// One reading is unusable and `skip_invalid_readings` is off.
    #[error(
        "reading in {}, sample {sample:?}: {problem}; or set skip_invalid_readings to drop invalid readings with a warning",
        mobilis_sdk::sdk::data_row(*.row)
    )]
    InvalidReading {
        /// 0-based index of the reading in the input.
        row: usize,
        sample: String,
        problem: ReadingProblem,
    },
    /// Samples that have readings but no row in the given sample sheet (sorted).
    #[error(
        "sample(s) {} have readings but no row in the sample sheet; add them to the sheet (thickness_m null for a 2D sheet) or leave the sheet out",
        quoted_list(.samples)
    )]
    SamplesMissingFromSheet { samples: Vec<String> },
    /// The sample sheet names a sample twice.
    #[error("sample {sample:?} appears more than once in the sample sheet; keep one row per sample")]
    DuplicateSample { sample: String },
    /// `thickness_m` is zero, negative or not finite.
    #[error(
        "thickness_m of sample {sample:?} is {thickness_m}; give a positive thickness in metres, or null for a 2D sheet"
    )]
    InvalidThickness { sample: String, thickness_m: f64 },
    /// `thickness_m_unc` is negative or not finite.
    #[error(
        "thickness_m_unc of sample {sample:?} is {thickness_unc_m}; give a non-negative standard uncertainty in metres, or null"
    )]
    InvalidThicknessUncertainty { sample: String, thickness_unc_m: f64 },
    /// `hall_factor` is zero, negative or not finite.
    #[error(
        "hall_factor of sample {sample:?} is {hall_factor}; give a positive Hall scattering factor (1 when unknown)"
    )]
    InvalidHallFactor { sample: String, hall_factor: f64 },
    /// A calibration column of the sample sheet is negative or not finite.
    #[error(
        "{column} of sample {sample:?} is {value}; give a finite standard uncertainty of 0 or more (relative for the scales, in K for the thermometer), or null to use the call's value"
    )]
    InvalidSampleCalibration {
        sample: String,
        column: &'static str,
        value: f64,
    },
    /// A Hall bar's length or width is zero, negative or not finite.
    #[error(
        "Hall bar {sample:?} has bar_length_m = {length_m} and bar_width_m = {width_m}; give the positive distance between the longitudinal voltage contacts and the bar width, in metres"
    )]
    InvalidHallBarDimensions {
        sample: String,
        length_m: f64,
        width_m: f64,
    },
    /// A setting is out of its range.
    #[error("setting {setting} is {value}; {requirement}")]
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The columns given to `reduce_columns` differ in length.
    #[error(
        "column {column} has {length} values but the sample column has {expected}; give every reading column the same length"
    )]
    ColumnLengthMismatch {
        column: &'static str,
        length: usize,
        expected: usize,
    },
    /// Nothing left to reduce. `first_problems` are the first few invalid readings, each
    /// with its index, sample and reason, since a refused call carries no warnings.
    #[error("{}", no_valid_readings(*.total, *.skipped, .first_problems))]
    NoValidReadings {
        total: usize,
        skipped: usize,
        first_problems: Vec<String>,
    },
}

/// The other geometry, named as the sample sheet would declare it.
fn other_geometry(geometry: &str) -> &'static str {
    if geometry == "van_der_pauw" {
        "a Hall bar"
    } else {
        "a van der Pauw sample"
    }
}

/// Sample names, each quoted, joined by commas.
fn quoted_list(samples: &[String]) -> String {
    let names: Vec<String> = samples.iter().map(|name| format!("{name:?}")).collect();
    names.join(", ")
}

/// An empty table and a table of only invalid readings need different advice.
fn no_valid_readings(total: usize, skipped: usize, first_problems: &[String]) -> String {
    if total == 0 {
        return "the readings table is empty; give at least one four-terminal reading".to_owned();
    }
    let listed = if first_problems.len() < skipped {
        format!("the first {}", first_problems.len())
    } else {
        "each".to_owned()
    };
    format!(
        "all {total} readings are invalid ({skipped} skipped), {listed} with its reason: {}; correct the readings",
        first_problems.join("; ")
    )
}

/// The empty contact cells, as a message begins: "`i_in` is", "`i_in`, `v_neg` are".
fn empty_contacts(columns: &[&str]) -> String {
    let names: Vec<String> = columns.iter().map(|name| format!("`{name}`")).collect();
    let verb = if names.len() == 1 { "is" } else { "are" };
    format!("{} {verb}", names.join(", "))
}
