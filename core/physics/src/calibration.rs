//! The calibrations a lab states for its instruments, and what is assumed when it states none:
//! one source for `hall.reduce`, the sweep analyses and the Shubnikov-de Haas analysis, so a
//! lab meets the same names and the same assumptions everywhere.
//!
//! Each is a standard uncertainty (one sigma) of an error shared by a whole series or sweep:
//! a scale error of the field, the current source or the voltmeter (relative), or an offset of
//! the thermometer (K). The assumed values are common practice, not taken from a standard;
//! every analysis that assumes one lists it in its summary (`calibrations_not_stated`) and
//! says so in a warning.

/// Parameter (and sample-sheet column) name of the field scale's relative uncertainty.
pub const FIELD_CALIBRATION: &str = "field_calibration_rel";
/// Parameter name of the current source's relative uncertainty.
pub const CURRENT_CALIBRATION: &str = "current_calibration_rel";
/// Parameter name of the voltmeter gain's relative uncertainty.
pub const VOLTAGE_CALIBRATION: &str = "voltage_calibration_rel";
/// Parameter name of the thermometer's standard uncertainty, K.
pub const TEMPERATURE_ACCURACY: &str = "temperature_accuracy_K";

/// Assumed when the field calibration is not stated: 0.5 %, a Hall-probe gaussmeter or a
/// magnet constant as usually calibrated (common practice).
pub const DEFAULT_FIELD_CALIBRATION_REL: f64 = 5e-3;
/// Assumed when the current calibration is not stated: 0.1 %, the accuracy of a precision
/// current source on its usual ranges (common practice).
pub const DEFAULT_CURRENT_CALIBRATION_REL: f64 = 1e-3;
/// Assumed when the voltage calibration is not stated: 0.01 %, the gain accuracy of a
/// nanovoltmeter or digital multimeter on a millivolt range (common practice).
pub const DEFAULT_VOLTAGE_CALIBRATION_REL: f64 = 1e-4;
/// Assumed when the thermometer accuracy is not stated: 0.02 K, a calibrated cryogenic
/// sensor (common practice).
pub const DEFAULT_TEMPERATURE_ACCURACY_K: f64 = 0.02;
