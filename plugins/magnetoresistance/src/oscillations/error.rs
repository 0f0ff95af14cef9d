//! Why an oscillation analysis is refused or fails.
//!
//! Every message names what is wrong (the 0-based sweep and point, the value, the window)
//! and what to change. `Display` is derived with `thiserror`, as in the other plugins.

use mobilis_numerics::fit::FitError;

/// Why [`super::analyze_oscillations`] refuses its input or finds no result.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum OscillationError {
    /// No sweep was given.
    #[error("no sweep was given; give at least one rho_xx(B) sweep (several temperatures for an effective mass)")]
    NoSweeps,
    /// The field and rho_xx columns of a sweep differ in length.
    #[error("sweep {sweep} has {fields} fields but {values} rho_xx values; give one rho_xx per field")]
    LengthMismatch { sweep: usize, fields: usize, values: usize },
    /// A value is NaN or infinite.
    #[error("sweep {sweep}, point {index}: {column} is {value}; give a finite number or drop the point")]
    NonFinite {
        sweep: usize,
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// A sweep's temperature is not finite and positive.
    #[error("sweep {sweep} has temperature {value} K; give the finite positive temperature of the measurement")]
    InvalidTemperature { sweep: usize, value: f64 },
    /// The fields of a sweep do not increase (or decrease) strictly.
    #[error(
        "sweep {sweep}: the field at point {index} ({field_t} T) breaks the order of the fields (they must increase or decrease strictly, without repeats); give one branch sorted by field, such as the output of mr.symmetrize"
    )]
    NonMonotonic { sweep: usize, index: usize, field_t: f64 },
    /// A setting out of its range.
    #[error("setting {name} is {value}; {requirement}")]
    InvalidSetting {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The field window is empty or reaches zero field.
    #[error(
        "the field window [{field_min_t}, {field_max_t}] T is empty or reaches zero field, where 1/B diverges; give 0 < field_min_T < field_max_T"
    )]
    InvalidWindow { field_min_t: f64, field_max_t: f64 },
    /// Too few points of a sweep inside the field window.
    #[error(
        "sweep {sweep} has {points} points in the field window [{field_min_t}, {field_max_t}] T, fewer than the {required} the analysis needs; widen the window or give a denser sweep"
    )]
    TooFewPoints {
        sweep: usize,
        points: usize,
        required: usize,
        field_min_t: f64,
        field_max_t: f64,
    },
    /// The window does not hold the required number of periods of the strongest component.
    #[error(
        "the strongest oscillation (about {frequency_t:.3} T) completes only {periods:.2} periods over the 1/B range of the window ({inverse_span_per_t:.4} 1/T), fewer than {required}; widen the field window (a lower field_min_T) so that it holds at least {required} periods"
    )]
    TooFewPeriods {
        frequency_t: f64,
        periods: f64,
        required: f64,
        inverse_span_per_t: f64,
    },
    /// No peak of the spectrum stands out of the noise above the lowest resolvable frequency.
    #[error(
        "no peak of the spectrum between {lowest_frequency_t:.3} T and {highest_frequency_t:.3} T stands out of the noise (best peak {best_ratio:.2} times the median, {required_ratio} needed); frequencies below {lowest_frequency_t:.3} T complete fewer than the required periods in the window, so widen the field window (a lower field_min_T); a weak oscillation needs less noise (more averaging per point, or several sweeps averaged) to stand out"
    )]
    NoOscillation {
        lowest_frequency_t: f64,
        highest_frequency_t: f64,
        best_ratio: f64,
        required_ratio: f64,
    },
    /// The reference sweep minus its background is flat to rounding.
    #[error(
        "the coldest sweep (sweep {sweep}, {} K) minus its background varies by only {relative_rms:.1e} of its rho_xx, the level of rounding: it holds no oscillation to analyse; check that the column is the rho_xx of a field sweep and that the field window covers the field range where it oscillates",
        mobilis_physics::units::format_number(*.temperature_k)
    )]
    NoVariation {
        sweep: usize,
        temperature_k: f64,
        relative_rms: f64,
    },
    /// A mass was asked for but every sweep is at one temperature.
    #[error(
        "an effective mass needs sweeps at two or more temperatures, but all {sweeps} sweep(s) are at {} K; add sweeps at other temperatures, give a known effective_mass_ratio, or do not ask for the mass",
        mobilis_physics::units::format_number(*.temperature_k)
    )]
    SingleTemperature { temperature_k: f64, sweeps: usize },
    /// A least-squares fit failed.
    #[error("the {what} failed: {error}")]
    Fit { what: &'static str, error: FitError },
    /// A mass was asked for but neither method gave one; the reasons are the warnings.
    #[error(
        "neither the waveform fit nor the narrow windows gave an effective mass ({}); widen the field window, add temperatures where the oscillation is still visible, or do not ask for the mass",
        .reasons.join("; ")
    )]
    MassNotDetermined { reasons: Vec<String> },
}
