//! What a reduction takes and what it gives: the sample sheet, the calibrations and the
//! settings; the rows, their float columns by index and the calibrations each sample was
//! reduced with. The reduction's own files (rows, cells, table) all build on these, so they
//! sit below them and below the module root that re-exports them.

use super::error::ReduceError;

/// The contact layout of a sample.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Geometry {
    /// Four contacts 1 to 4 on the perimeter, counterclockwise seen from the +B side.
    VanDerPauw,
    /// Six contacts (see `mobilis_physics::contacts`): `length_m` is the distance between the
    /// longitudinal voltage contacts (centre to centre), `width_m` the bar width.
    HallBar { length_m: f64, width_m: f64 },
}

impl Geometry {
    /// The name used in the output table: "van_der_pauw" or "hall_bar".
    pub fn name(self) -> &'static str {
        match self {
            Geometry::VanDerPauw => "van_der_pauw",
            Geometry::HallBar { .. } => "hall_bar",
        }
    }
}

/// One row of the sample sheet.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleInfo {
    pub name: String,
    /// Conducting thickness, m; `None` for a 2D sheet (volume quantities are then null).
    pub thickness_m: Option<f64>,
    /// Standard uncertainty of the thickness, m; ignored without a thickness.
    pub thickness_unc_m: Option<f64>,
    /// Hall scattering factor r_H = mu_H / mu_drift; 1 when unknown.
    pub hall_factor: f64,
    pub geometry: Geometry,
    /// Calibrations stated for this sample; they take precedence over the call's.
    pub calibration: Calibration,
}

impl SampleInfo {
    /// A 2D van der Pauw sample with Hall factor 1, what a sample without a sheet row is.
    pub fn van_der_pauw_sheet(name: impl Into<String>) -> Self {
        SampleInfo {
            name: name.into(),
            thickness_m: None,
            thickness_unc_m: None,
            hall_factor: 1.0,
            geometry: Geometry::VanDerPauw,
            calibration: Calibration::default(),
        }
    }
}

/// The calibrations of a measurement, as standard uncertainties: `None` is "not stated",
/// and then the default below is assumed and the reduction says so. Each one is an error
/// common to every reading of a sample's series (one gaussmeter, one source, one
/// voltmeter, one thermometer), so it goes into the systematic part of the budget, never
/// into the statistical one.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Calibration {
    /// Relative standard uncertainty of the field scale (gaussmeter or magnet constant).
    pub field_rel: Option<f64>,
    /// Relative standard uncertainty of the current source's scale.
    pub current_rel: Option<f64>,
    /// Relative standard uncertainty of the voltmeter's gain.
    pub voltage_rel: Option<f64>,
    /// Standard uncertainty of the thermometer's reading of the sample temperature, K.
    pub temperature_accuracy_k: Option<f64>,
}

/// The parameter (and sample-sheet column) names of the calibrations, for messages.
pub mod calibration_names {
    pub const THICKNESS: &str = "thickness_m_unc";
    pub const FIELD: &str = "field_calibration_rel";
    pub const CURRENT: &str = "current_calibration_rel";
    pub const VOLTAGE: &str = "voltage_calibration_rel";
    pub const TEMPERATURE: &str = "temperature_accuracy_K";
}

/// The calibrations one sample was reduced with, and which of them were assumed.
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationUsed {
    pub sample: String,
    /// Relative standard uncertainty of the thickness (0 for a 2D sheet or when not stated).
    pub thickness_rel: f64,
    pub field_rel: f64,
    pub current_rel: f64,
    pub voltage_rel: f64,
    pub temperature_accuracy_k: f64,
    /// Names (see [`calibration_names`]) of the calibrations that were not stated for this
    /// sample, neither in the sheet nor in the call, and were assumed.
    pub not_stated: Vec<&'static str>,
    /// The pooled standard deviation of one reading's voltage over the sample's series, V
    /// (see the module documentation); `None` when no reading was repeated or redundant.
    pub reading_noise_v: Option<f64>,
}

/// Limits of the quality flags. The defaults are common practice, not taken from a standard.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QualityThresholds {
    /// Largest |direct - reciprocal| / mean of a resistance family (flag `reciprocity`).
    /// Default 0.03, common practice.
    pub reciprocity_tolerance: f64,
    /// Largest max(R_A/R_B, R_B/R_A) (flag `resistance_ratio`). Default 2.0, common practice.
    pub max_resistance_ratio: f64,
    /// Largest (max - min) / |mean| of the Hall resistances of the configurations and
    /// polarities (flag `hall_inconsistent`). Default 0.10, common practice.
    pub hall_spread_tolerance: f64,
    /// Largest |V_offset| / |R I| (flag `large_offset`). Default 0.2, common practice.
    pub thermoelectric_offset_ratio: f64,
    /// Largest |field-even| / |field-odd| part of the Hall configurations (flag
    /// `large_offset`). Default 10, common practice.
    pub misalignment_ratio: f64,
    /// Largest |R(+I) - R(-I)| / mean of a resistance configuration (flag
    /// `current_reversal`). Default 0.03, common practice.
    pub current_reversal_tolerance: f64,
}

impl Default for QualityThresholds {
    fn default() -> Self {
        QualityThresholds {
            reciprocity_tolerance: 0.03,
            max_resistance_ratio: 2.0,
            hall_spread_tolerance: 0.10,
            thermoelectric_offset_ratio: 0.2,
            misalignment_ratio: 10.0,
            current_reversal_tolerance: 0.03,
        }
    }
}

/// How readings are grouped and judged.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReduceSettings {
    /// Readings whose sorted temperatures are no further apart than this (and than 5 % of
    /// the temperature) share a row, K. Default 0.5 K.
    pub temperature_tolerance_k: f64,
    /// |B| at or below this is zero field, T. Default 1e-2 T (100 G): well above the few mT
    /// an electromagnet keeps at a nominal zero, well below a Hall field (common practice).
    pub zero_field_tolerance_t: f64,
    /// Width of a field setpoint, T: a row takes the readings whose |B| lie within this of
    /// its smallest |B|. Default 5e-3 T.
    pub field_tolerance_t: f64,
    /// Calibrations stated for the whole call (a sample-sheet value takes precedence).
    pub calibration: Calibration,
    pub thresholds: QualityThresholds,
    /// Drop invalid readings with a warning instead of refusing the input. Default false.
    pub skip_invalid_readings: bool,
    /// The lab states that its van der Pauw samples are symmetric under a 90-degree rotation
    /// (R_A = R_B): a row with one family only then gets R_s = pi R / ln 2 from it, flagged
    /// `assumed_symmetric`. Default false: such a row's sheet resistance is null.
    pub assume_symmetric_sample: bool,
}

impl Default for ReduceSettings {
    fn default() -> Self {
        ReduceSettings {
            temperature_tolerance_k: 0.5,
            zero_field_tolerance_t: 1e-2,
            field_tolerance_t: 5e-3,
            calibration: Calibration::default(),
            thresholds: QualityThresholds::default(),
            skip_invalid_readings: false,
            assume_symmetric_sample: false,
        }
    }
}

impl ReduceSettings {
    pub(super) fn validate(&self) -> Result<(), ReduceError> {
        let non_negative = "give a finite value of 0 or more";
        let positive = "give a finite positive value";
        let thresholds = &self.thresholds;
        let relative = "give a finite relative standard uncertainty of 0 or more (0.005 is 0.5 %)";
        let calibration = &self.calibration;
        let calibration_checks = [
            (calibration_names::FIELD, calibration.field_rel, relative),
            (calibration_names::CURRENT, calibration.current_rel, relative),
            (calibration_names::VOLTAGE, calibration.voltage_rel, relative),
            (
                calibration_names::TEMPERATURE,
                calibration.temperature_accuracy_k,
                "give a finite standard uncertainty of the thermometer in K, 0 or more",
            ),
        ];
        for (setting, value, requirement) in calibration_checks {
            if let Some(value) = value {
                if !(value >= 0.0 && value.is_finite()) {
                    return Err(ReduceError::InvalidSetting {
                        setting,
                        value,
                        requirement,
                    });
                }
            }
        }
        let checks: [(&'static str, f64, bool, &'static str); 9] = [
            (
                "temperature_tolerance_K",
                self.temperature_tolerance_k,
                self.temperature_tolerance_k >= 0.0,
                non_negative,
            ),
            (
                "zero_field_tolerance_T",
                self.zero_field_tolerance_t,
                self.zero_field_tolerance_t >= 0.0,
                non_negative,
            ),
            (
                "field_tolerance_T",
                self.field_tolerance_t,
                self.field_tolerance_t >= 0.0,
                non_negative,
            ),
            (
                "reciprocity_tolerance",
                thresholds.reciprocity_tolerance,
                thresholds.reciprocity_tolerance > 0.0,
                positive,
            ),
            (
                "max_resistance_ratio",
                thresholds.max_resistance_ratio,
                thresholds.max_resistance_ratio >= 1.0,
                "give a finite ratio of 1 or more (it compares the larger resistance with the smaller)",
            ),
            (
                "hall_spread_tolerance",
                thresholds.hall_spread_tolerance,
                thresholds.hall_spread_tolerance > 0.0,
                positive,
            ),
            (
                "thermoelectric_offset_ratio",
                thresholds.thermoelectric_offset_ratio,
                thresholds.thermoelectric_offset_ratio > 0.0,
                positive,
            ),
            (
                "misalignment_ratio",
                thresholds.misalignment_ratio,
                thresholds.misalignment_ratio > 0.0,
                positive,
            ),
            (
                "current_reversal_tolerance",
                thresholds.current_reversal_tolerance,
                thresholds.current_reversal_tolerance > 0.0,
                positive,
            ),
        ];
        for (setting, value, ok, requirement) in checks {
            if !(ok && value.is_finite()) {
                return Err(ReduceError::InvalidSetting {
                    setting,
                    value,
                    requirement,
                });
            }
        }
        Ok(())
    }
}

/// One sample, temperature group and field magnitude. SI units throughout; `None` is null.
#[derive(Debug, Clone, PartialEq)]
pub struct ReducedRow {
    pub sample: String,
    /// "van_der_pauw" or "hall_bar".
    pub geometry: &'static str,
    /// Mean temperature of the group, K.
    pub temperature_k: f64,
    /// Standard uncertainty of that temperature, K: the thermometer accuracy, in quadrature
    /// with the standard deviation of the group's readings' temperatures when their drift
    /// could not be corrected.
    pub temperature_k_unc: f64,
    /// Whether the readings of a drifting stage were brought to the mean temperature with
    /// the series' own slopes.
    pub drift_corrected: bool,
    /// max - min of the group's temperatures, K.
    pub temperature_spread_k: f64,
    /// The |B| the Hall quantities refer to, T; `None` without field readings.
    pub field_t: Option<f64>,
    /// Readings that entered the row: the group's zero-field readings plus this magnitude's.
    pub reading_count: usize,
    /// Van der Pauw R_A; for a Hall bar the longitudinal resistance R_xx. Ohm.
    pub resistance_a_ohm: Option<f64>,
    /// Van der Pauw R_B; `None` for a Hall bar. Ohm.
    pub resistance_b_ohm: Option<f64>,
    /// max(R_A/R_B, R_B/R_A).
    pub resistance_ratio: Option<f64>,
    /// Van der Pauw f of R_s = pi (R_A + R_B) / (2 ln 2) f.
    pub geometry_factor: Option<f64>,
    pub sheet_resistance_ohm_sq: Option<f64>,
    /// Total standard uncertainty (statistical and systematic in quadrature); likewise every
    /// `_unc` below.
    pub sheet_resistance_ohm_sq_unc: Option<f64>,
    /// From the scatter of the readings (Type A).
    pub sheet_resistance_ohm_sq_unc_stat: Option<f64>,
    /// From the calibrations, common to every row of the sample (Type B).
    pub sheet_resistance_ohm_sq_unc_sys: Option<f64>,
    pub resistivity_ohm_m: Option<f64>,
    pub resistivity_ohm_m_unc: Option<f64>,
    pub resistivity_ohm_m_unc_stat: Option<f64>,
    pub resistivity_ohm_m_unc_sys: Option<f64>,
    /// R_xy at `field_t`, positive for holes. Ohm.
    pub hall_resistance_ohm: Option<f64>,
    pub hall_resistance_ohm_unc: Option<f64>,
    /// R_Hs = R_xy / |B|, m^2/C.
    pub sheet_hall_coefficient_m2_per_c: Option<f64>,
    pub sheet_hall_coefficient_m2_per_c_unc: Option<f64>,
    /// R_H = R_Hs t, m^3/C.
    pub hall_coefficient_m3_per_c: Option<f64>,
    pub hall_coefficient_m3_per_c_unc: Option<f64>,
    /// "p" when R_Hs > 0, "n" when R_Hs < 0.
    pub carrier_type: Option<&'static str>,
    pub sheet_density_m2: Option<f64>,
    pub sheet_density_m2_unc: Option<f64>,
    pub sheet_density_m2_unc_stat: Option<f64>,
    pub sheet_density_m2_unc_sys: Option<f64>,
    pub density_m3: Option<f64>,
    pub density_m3_unc: Option<f64>,
    pub density_m3_unc_stat: Option<f64>,
    pub density_m3_unc_sys: Option<f64>,
    pub hall_mobility_m2_per_vs: Option<f64>,
    pub hall_mobility_m2_per_vs_unc: Option<f64>,
    pub hall_mobility_m2_per_vs_unc_stat: Option<f64>,
    pub hall_mobility_m2_per_vs_unc_sys: Option<f64>,
    /// mu_H / r_H.
    pub drift_mobility_m2_per_vs: Option<f64>,
    pub drift_mobility_m2_per_vs_unc: Option<f64>,
    pub hall_factor: f64,
    pub reciprocity_mismatch: Option<f64>,
    pub current_reversal_mismatch: Option<f64>,
    /// (max - min) / |mean| of the Hall resistances of the configurations and polarities.
    pub hall_spread: Option<f64>,
    pub thermoelectric_offset_ratio: Option<f64>,
    pub misalignment_ratio: Option<f64>,
    /// The pooled standard deviation of one reading's voltage in this row, V (from the
    /// residuals of its fits and the spread of its redundant configurations).
    pub reading_noise_v: Option<f64>,
    /// Raised flags, in the order of [`flags::ALL`].
    pub flags: Vec<&'static str>,
    pub quality_ok: bool,
}

/// The result: rows sorted by sample, temperature and field, warnings for the result JSON.
#[derive(Debug, Clone, PartialEq)]
pub struct Reduction {
    pub rows: Vec<ReducedRow>,
    pub warnings: Vec<String>,
    /// Invalid readings dropped under `skip_invalid_readings`.
    pub skipped_readings: usize,
    /// Per sample, in the order of the rows: the calibrations used and the pooled noise.
    pub calibrations: Vec<CalibrationUsed>,
}

/// The float columns of the output, by index into [`super::table::ReductionTable::floats`].
pub mod float_column {
    pub const TEMPERATURE_K: usize = 0;
    pub const TEMPERATURE_K_UNC: usize = 1;
    pub const TEMPERATURE_SPREAD_K: usize = 2;
    pub const FIELD_T: usize = 3;
    pub const RESISTANCE_A: usize = 4;
    pub const RESISTANCE_B: usize = 5;
    pub const RESISTANCE_RATIO: usize = 6;
    pub const GEOMETRY_FACTOR: usize = 7;
    pub const SHEET_RESISTANCE: usize = 8;
    pub const SHEET_RESISTANCE_UNC: usize = 9;
    pub const SHEET_RESISTANCE_UNC_STAT: usize = 10;
    pub const SHEET_RESISTANCE_UNC_SYS: usize = 11;
    pub const RESISTIVITY: usize = 12;
    pub const RESISTIVITY_UNC: usize = 13;
    pub const RESISTIVITY_UNC_STAT: usize = 14;
    pub const RESISTIVITY_UNC_SYS: usize = 15;
    pub const HALL_RESISTANCE: usize = 16;
    pub const HALL_RESISTANCE_UNC: usize = 17;
    pub const SHEET_HALL_COEFFICIENT: usize = 18;
    pub const SHEET_HALL_COEFFICIENT_UNC: usize = 19;
    pub const HALL_COEFFICIENT: usize = 20;
    pub const HALL_COEFFICIENT_UNC: usize = 21;
    pub const SHEET_DENSITY: usize = 22;
    pub const SHEET_DENSITY_UNC: usize = 23;
    pub const SHEET_DENSITY_UNC_STAT: usize = 24;
    pub const SHEET_DENSITY_UNC_SYS: usize = 25;
    pub const DENSITY: usize = 26;
    pub const DENSITY_UNC: usize = 27;
    pub const DENSITY_UNC_STAT: usize = 28;
    pub const DENSITY_UNC_SYS: usize = 29;
    pub const HALL_MOBILITY: usize = 30;
    pub const HALL_MOBILITY_UNC: usize = 31;
    pub const HALL_MOBILITY_UNC_STAT: usize = 32;
    pub const HALL_MOBILITY_UNC_SYS: usize = 33;
    pub const DRIFT_MOBILITY: usize = 34;
    pub const DRIFT_MOBILITY_UNC: usize = 35;
    pub const HALL_FACTOR: usize = 36;
    pub const RECIPROCITY_MISMATCH: usize = 37;
    pub const CURRENT_REVERSAL_MISMATCH: usize = 38;
    pub const HALL_SPREAD: usize = 39;
    pub const THERMOELECTRIC_OFFSET_RATIO: usize = 40;
    pub const MISALIGNMENT_RATIO: usize = 41;
    pub const READING_NOISE_V: usize = 42;
    pub const COUNT: usize = 43;
}
