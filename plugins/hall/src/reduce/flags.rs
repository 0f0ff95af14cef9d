//! Quality flags of a reduced row: stable names, what raises each one, and the threshold that
//! governs it.
//!
//! Each flag names one cause, so that a lab knows what to remeasure: a missing configuration
//! (`missing_configurations`) is kept apart from a missing current polarity
//! (`no_current_reversal`) and a missing field sign (`no_field_reversal`). A row lists its
//! flags in the order of [`ALL`]; `quality_ok` is true when the list is empty.
//!
//! The thresholds and their defaults (`QualityThresholds`, parameters of the same
//! names): `reciprocity_tolerance` 0.03, `max_resistance_ratio` 2, `hall_spread_tolerance`
//! 0.10, `thermoelectric_offset_ratio` 0.2, `misalignment_ratio` 10,
//! `current_reversal_tolerance` 0.03. They are common practice, not taken from a standard: a
//! lab with other habits sets its own. The flags without a threshold (`missing_configurations`,
//! `no_field_reversal`, `no_current_reversal`, `resistance_from_field_readings`,
//! `no_field_data`, `nonpositive_resistance`) say what was not measured or cannot be;
//! `assumed_symmetric` says a sheet resistance rests on the call's `assume_symmetric_sample`;
//! `drift_uncorrected` says the readings of a drifting stage were left at their own
//! temperatures.

/// R_A's (or R_B's) direct and reciprocal configurations differ by more than
/// `reciprocity_tolerance` relative to their mean.
pub const RECIPROCITY: &str = "reciprocity";
/// max(R_A/R_B, R_B/R_A) exceeds `max_resistance_ratio`: contacts far from symmetric or the
/// sample inhomogeneous.
pub const RESISTANCE_RATIO: &str = "resistance_ratio";
/// The Hall resistances of the configurations and current polarities differ in sign, or their
/// spread (max - min) / |mean| exceeds `hall_spread_tolerance`.
pub const HALL_INCONSISTENT: &str = "hall_inconsistent";
/// A thermoelectric offset larger than `thermoelectric_offset_ratio` times the signal R I, or
/// a field-even (misalignment) part of the Hall configurations larger than
/// `misalignment_ratio` times the Hall part. The reduction cancels both; a large one means the
/// result rests on a small difference of large numbers.
pub const LARGE_OFFSET: &str = "large_offset";
/// V/I of a resistance configuration at +I and at -I differ by more than
/// `current_reversal_tolerance` relative to their mean (non-ohmic contacts, heating, or
/// thermoelectric voltages).
pub const CURRENT_REVERSAL: &str = "current_reversal";
/// A resistance configuration (4 for van der Pauw, 2 longitudinal pairs for a Hall bar) or a
/// Hall configuration (2 diagonals, 2 transverse pairs) has no reading in this row. A van der
/// Pauw family (R_A or R_B) without any reading leaves its resistance, the ratio, the
/// geometry factor, the sheet resistance and the mobilities null: nothing is assumed.
pub const MISSING_CONFIGURATIONS: &str = "missing_configurations";
/// A Hall configuration at this field magnitude was measured at one field sign only; when no
/// configuration has both signs the Hall quantities are null.
pub const NO_FIELD_REVERSAL: &str = "no_field_reversal";
/// A configuration was measured at one current polarity only: its thermoelectric offset
/// cannot be separated (unless it has two distinct currents) and the current-reversal check
/// cannot be made.
pub const NO_CURRENT_REVERSAL: &str = "no_current_reversal";
/// The temperature group has no zero-field resistance reading; the resistances are the
/// field-even part of the readings at +B and -B and include any magnetoresistance.
pub const RESISTANCE_FROM_FIELD_READINGS: &str = "resistance_from_field_readings";
/// The temperature group has no reading at nonzero field: the Hall quantities are null.
pub const NO_FIELD_DATA: &str = "no_field_data";
/// A canonical resistance came out zero or negative, which no uniform sample gives: the
/// contacts are misnumbered (they go counterclockwise seen from the +B side) or one is
/// broken. The sheet resistance and mobility are null.
pub const NONPOSITIVE_RESISTANCE: &str = "nonpositive_resistance";

/// One van der Pauw family was measured and `assume_symmetric_sample` is set: the sheet
/// resistance is pi R / ln 2 from that family, exact only for a sample symmetric under a
/// 90-degree rotation, and its uncertainty does not include any asymmetry.
pub const ASSUMED_SYMMETRIC: &str = "assumed_symmetric";

/// The group's readings drift in temperature and were left as measured: the correction would
/// change a reading by more than 10 %, or the series has no neighbouring temperatures to
/// take a slope from. The resistance and Hall readings were taken at different temperatures,
/// so the row mixes them; its statistical uncertainties include each quantity's
/// sensitivity to temperature times the offset of its readings' mean temperature from the
/// row's (the parent module's step 8).
pub const DRIFT_UNCORRECTED: &str = "drift_uncorrected";

/// Every flag, in the order a row lists them.
pub const ALL: [&str; 13] = [
    RECIPROCITY,
    RESISTANCE_RATIO,
    HALL_INCONSISTENT,
    LARGE_OFFSET,
    CURRENT_REVERSAL,
    MISSING_CONFIGURATIONS,
    NO_FIELD_REVERSAL,
    NO_CURRENT_REVERSAL,
    RESISTANCE_FROM_FIELD_READINGS,
    NO_FIELD_DATA,
    NONPOSITIVE_RESISTANCE,
    ASSUMED_SYMMETRIC,
    DRIFT_UNCORRECTED,
];

/// One-line descriptions for a plugin's `describe` output, in the order of [`ALL`].
pub const DESCRIPTIONS: [(&str, &str); 13] = [
    (
        RECIPROCITY,
        "direct and reciprocal resistance configurations differ by more than reciprocity_tolerance",
    ),
    (RESISTANCE_RATIO, "max(R_A/R_B, R_B/R_A) exceeds max_resistance_ratio"),
    (
        HALL_INCONSISTENT,
        "Hall resistances of the configurations differ in sign or spread more than hall_spread_tolerance",
    ),
    (
        LARGE_OFFSET,
        "thermoelectric offset or misalignment voltage above thermoelectric_offset_ratio or misalignment_ratio",
    ),
    (
        CURRENT_REVERSAL,
        "V/I at +I and -I differ by more than current_reversal_tolerance",
    ),
    (
        MISSING_CONFIGURATIONS,
        "a resistance or Hall configuration has no reading; without R_A or R_B the sheet resistance is null",
    ),
    (
        NO_FIELD_REVERSAL,
        "a Hall configuration was measured at one field sign only",
    ),
    (
        NO_CURRENT_REVERSAL,
        "a configuration was measured at one current polarity only",
    ),
    (
        RESISTANCE_FROM_FIELD_READINGS,
        "no zero-field readings: resistances are the field-even part of the in-field readings",
    ),
    (NO_FIELD_DATA, "no reading at nonzero field: Hall quantities are null"),
    (
        NONPOSITIVE_RESISTANCE,
        "a resistance came out zero or negative: check contact numbering and wiring",
    ),
    (
        ASSUMED_SYMMETRIC,
        "one of R_A and R_B measured: sheet resistance pi R / ln 2 under assume_symmetric_sample",
    ),
    (
        DRIFT_UNCORRECTED,
        "readings drift in temperature and were left as measured: _unc_stat includes their temperature offsets",
    ),
];
