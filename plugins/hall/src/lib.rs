//! The `hall` plugin: `hall.reduce`, raw four-terminal readings (van der Pauw or Hall bar)
//! to one row per sample, temperature and field magnitude with sheet resistance,
//! resistivity, Hall coefficient, carrier type, density and mobility, their uncertainties
//! and quality flags.
//!
//! This file is the table glue: the physics is in [`reduce`] and knows nothing of
//! DataFrames; the C side is written by `mobilis_sdk::export_plugin!`.
//!
//! # Input roles
//!
//! **`readings`**, one row per reading: `sample`, `temperature_K`, `field_T`, `current_A`
//! (entering at `i_in`; negative for a reversed source), `voltage_V` (V(`v_pos`) - V(`v_neg`)),
//! and the configuration, either as the four contact columns `i_in`, `i_out`, `v_pos`, `v_neg`
//! or as one `contacts` column in pair notation (`"21,34"`: current in at 2, out at 1, voltage
//! V3 - V4; `mobilis_physics::contacts::parse_pair_notation`). Both forms are declared optional
//! and the glue checks that one is there; with both, every reading must agree, and a
//! disagreement or a malformed cell (`21;3`) is an error naming its reading and the expected
//! form. In a CSV file separated by commas the cell must be quoted. Contact numbering (van der
//! Pauw 1 to 4 counterclockwise seen from the +B side; Hall bars 1 to 6) and the canonical
//! orientations are in `mobilis_physics::contacts`.
//!
//! **`samples`** (optional), the sample sheet, one row per sample: `sample`, `thickness_m`
//! (null for a 2D sheet), optional `thickness_m_unc`, `hall_factor` (r_H, default 1),
//! `geometry` (`van_der_pauw`, the default, or `hall_bar`), and for Hall bars `bar_length_m`
//! (the centre-to-centre distance of the longitudinal voltage contacts) and `bar_width_m`. A
//! sample listed twice, or one in the readings but not in a given sheet, is an error. A sheet
//! column without any value is read as empty whatever type it was imported as (a spreadsheet
//! column left blank imports as text). Without a sheet every sample is a 2D van der Pauw
//! sample with Hall factor 1.
//!
//! # Calibrations
//!
//! `thickness_m_unc` (m; 0 when not stated), `field_calibration_rel` (0.005),
//! `current_calibration_rel` (0.001), `voltage_calibration_rel` (1e-4) and
//! `temperature_accuracy_K` (0.02 K) come per sample from sample-sheet columns of those names,
//! else per call from parameters of the same names, else from these defaults (common practice,
//! not a standard). The summary lists them (`calibrations`: per sample the values used, the
//! names `not_stated`, and `reading_noise_V`, the pooled voltage noise of one reading;
//! `calibrations_not_stated` over all samples), and a warning names the assumed ones. How they
//! enter each quantity is in [`reduce`], "The uncertainty budget".
//!
//! # Output
//!
//! One row per sample, temperature group and field magnitude; the columns are the `OUTPUT`
//! table of this file, listed by `analysis.describe`. The quality flags, their thresholds and
//! parameters are in [`reduce::flags`]; their defaults are common practice, not taken from a
//! standard. Bad readings (zero current, NaN, an empty contact cell, a contact outside 1..4 or
//! 1..6, a magnitude no laboratory gives) are errors naming the reading;
//! `skip_invalid_readings: true` drops them with warnings. A van der Pauw row with only R_A or
//! only R_B has a null sheet resistance unless `assume_symmetric_sample` states the samples
//! symmetric ([`reduce`], step 5).

pub mod figures;
pub mod reduce;

use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType, InputRole};
use mobilis_sdk::sdk::{self, data_row, Analysis, AnalysisError, AnalysisOutput, Host, Inputs, OutputBuilder};
use polars::prelude::*;
use reduce::{
    calibration_names, flags, float_column, Calibration, FlagSet, FloatColumn, Geometry, QualityThresholds,
    ReadingColumns, ReduceSettings, ReductionTable, SampleInfo,
};
use schemars::JsonSchema;
use serde::Deserialize;
use serde_json::json;

/// `hall.reduce`.
pub struct HallReduce;

/// Parameters of `hall.reduce`; every one has a documented default.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ReduceParams {
    /// readings whose sorted temperatures are no further apart than this, and than 5 % of
    /// the temperature, share a row, K (so sub-kelvin setpoints stay apart)
    #[serde(rename = "temperature_tolerance_K", default = "ReduceParams::temperature_tolerance")]
    #[schemars(range(min = 0))]
    pub temperature_tolerance_k: f64,
    /// |B| at or below this counts as zero field, T: wide enough for the few mT of
    /// remanence an electromagnet keeps at a nominal zero (common practice); lower it for a
    /// Hall field below 10 mT
    #[serde(rename = "zero_field_tolerance_T", default = "ReduceParams::zero_field_tolerance")]
    #[schemars(range(min = 0))]
    pub zero_field_tolerance_t: f64,
    /// width of a field setpoint, T: a row takes the readings whose |B| lie within this of
    /// its smallest |B|, so a densely logged ramp is cut into setpoints rather than chained
    /// into one row
    #[serde(rename = "field_tolerance_T", default = "ReduceParams::field_tolerance")]
    #[schemars(range(min = 0))]
    pub field_tolerance_t: f64,
    /// flag `reciprocity` above this |direct - reciprocal| / mean (common practice)
    #[serde(default = "ReduceParams::reciprocity")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub reciprocity_tolerance: f64,
    /// flag `resistance_ratio` above this max(R_A/R_B, R_B/R_A) (common practice)
    #[serde(default = "ReduceParams::resistance_ratio")]
    #[schemars(range(min = 1))]
    pub max_resistance_ratio: f64,
    /// flag `hall_inconsistent` above this (max - min) / |mean| of the Hall resistances
    /// (common practice)
    #[serde(default = "ReduceParams::hall_spread")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub hall_spread_tolerance: f64,
    /// flag `large_offset` above this |V_offset| / |R I| (common practice)
    #[serde(default = "ReduceParams::thermoelectric")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub thermoelectric_offset_ratio: f64,
    /// flag `large_offset` above this field-even / field-odd ratio of the Hall
    /// configurations (common practice)
    #[serde(default = "ReduceParams::misalignment")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub misalignment_ratio: f64,
    /// flag `current_reversal` above this |R(+I) - R(-I)| / mean (common practice)
    #[serde(default = "ReduceParams::current_reversal")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub current_reversal_tolerance: f64,
    /// drop invalid readings (zero current, NaN, bad contacts) with a warning instead of
    /// refusing the input
    #[serde(default)]
    pub skip_invalid_readings: bool,
    /// the van der Pauw samples are symmetric under a 90-degree rotation (R_A = R_B, e.g. a
    /// cloverleaf with symmetric contacts): a row where only R_A or only R_B was measured
    /// gets R_s = pi R / ln 2 from it (van der Pauw 1958), flagged assumed_symmetric, with an
    /// uncertainty that does not include any asymmetry; by default such a row's sheet
    /// resistance and mobility are null
    #[serde(default)]
    pub assume_symmetric_sample: bool,
    #[serde(default)]
    #[schemars(range(min = 0), description = format!("relative standard uncertainty of the field scale (gaussmeter, magnet constant); a sample-sheet column of the same name takes precedence; when not stated {} is assumed (common practice) and the summary says so", reduce::DEFAULT_FIELD_CALIBRATION_REL))]
    pub field_calibration_rel: Option<f64>,
    #[serde(default)]
    #[schemars(range(min = 0), description = format!("relative standard uncertainty of the current source's scale; sample-sheet column of the same name takes precedence; when not stated {} is assumed (common practice)", reduce::DEFAULT_CURRENT_CALIBRATION_REL))]
    pub current_calibration_rel: Option<f64>,
    #[serde(default)]
    #[schemars(range(min = 0), description = format!("relative standard uncertainty of the voltmeter's gain; sample-sheet column of the same name takes precedence; when not stated {} is assumed (common practice)", reduce::DEFAULT_VOLTAGE_CALIBRATION_REL))]
    pub voltage_calibration_rel: Option<f64>,
    #[serde(rename = "temperature_accuracy_K", default)]
    #[schemars(range(min = 0), description = format!("standard uncertainty of the thermometer, K, added in quadrature to the readings' temperature spread in temperature_K_unc; sample-sheet column of the same name takes precedence; when not stated {} K is assumed (common practice)", reduce::DEFAULT_TEMPERATURE_ACCURACY_K))]
    pub temperature_accuracy_k: Option<f64>,
}

/// The defaults are those of the physics settings, so they are stated once.
impl ReduceParams {
    fn temperature_tolerance() -> f64 {
        ReduceSettings::default().temperature_tolerance_k
    }
    fn zero_field_tolerance() -> f64 {
        ReduceSettings::default().zero_field_tolerance_t
    }
    fn field_tolerance() -> f64 {
        ReduceSettings::default().field_tolerance_t
    }
    fn reciprocity() -> f64 {
        QualityThresholds::default().reciprocity_tolerance
    }
    fn resistance_ratio() -> f64 {
        QualityThresholds::default().max_resistance_ratio
    }
    fn hall_spread() -> f64 {
        QualityThresholds::default().hall_spread_tolerance
    }
    fn thermoelectric() -> f64 {
        QualityThresholds::default().thermoelectric_offset_ratio
    }
    fn misalignment() -> f64 {
        QualityThresholds::default().misalignment_ratio
    }
    fn current_reversal() -> f64 {
        QualityThresholds::default().current_reversal_tolerance
    }
}

impl ReduceParams {
    fn settings(&self) -> ReduceSettings {
        ReduceSettings {
            temperature_tolerance_k: self.temperature_tolerance_k,
            zero_field_tolerance_t: self.zero_field_tolerance_t,
            field_tolerance_t: self.field_tolerance_t,
            thresholds: QualityThresholds {
                reciprocity_tolerance: self.reciprocity_tolerance,
                max_resistance_ratio: self.max_resistance_ratio,
                hall_spread_tolerance: self.hall_spread_tolerance,
                thermoelectric_offset_ratio: self.thermoelectric_offset_ratio,
                misalignment_ratio: self.misalignment_ratio,
                current_reversal_tolerance: self.current_reversal_tolerance,
            },
            skip_invalid_readings: self.skip_invalid_readings,
            assume_symmetric_sample: self.assume_symmetric_sample,
            calibration: Calibration {
                field_rel: self.field_calibration_rel,
                current_rel: self.current_calibration_rel,
                voltage_rel: self.voltage_calibration_rel,
                temperature_accuracy_k: self.temperature_accuracy_k,
            },
        }
    }
}

/// Where an output column comes from in the [`ReductionTable`].
enum Source {
    /// A float column of the reduction, by [`float_column`] index.
    Float(usize),
    Sample,
    Geometry,
    Carrier,
    ReadingCount,
    DriftCorrected,
    Flags,
    QualityOk,
}

/// The output table: one entry per column, used both to declare and to build it.
const OUTPUT: &[(&str, Option<&str>, &str, Source)] = &[
    ("sample", None, "sample name", Source::Sample),
    (
        "geometry",
        None,
        "van_der_pauw or hall_bar",
        Source::Geometry,
    ),
    (
        "temperature_K",
        Some("K"),
        "mean temperature of the group",
        Source::Float(float_column::TEMPERATURE_K),
    ),
    (
        "temperature_K_unc",
        Some("K"),
        "standard uncertainty of the temperature: standard deviation of the readings' temperatures and the thermometer accuracy in quadrature",
        Source::Float(float_column::TEMPERATURE_K_UNC),
    ),
    (
        "temperature_spread_K",
        Some("K"),
        "max - min of the group's temperatures",
        Source::Float(float_column::TEMPERATURE_SPREAD_K),
    ),
    (
        "field_T",
        Some("T"),
        "|B| of the Hall quantities; null without field readings",
        Source::Float(float_column::FIELD_T),
    ),
    (
        "reading_count",
        None,
        "readings that entered the row",
        Source::ReadingCount,
    ),
    (
        "resistance_a_ohm",
        Some("ohm"),
        "van der Pauw R_A, the mean of R_21,34 and R_43,12 measured (Hall bar: R_xx); null when none was measured",
        Source::Float(float_column::RESISTANCE_A),
    ),
    (
        "resistance_b_ohm",
        Some("ohm"),
        "van der Pauw R_B, the mean of R_32,41 and R_14,23 measured; null when none was measured (never assumed equal to R_A)",
        Source::Float(float_column::RESISTANCE_B),
    ),
    (
        "resistance_ratio",
        None,
        "max(R_A/R_B, R_B/R_A); null unless both were measured",
        Source::Float(float_column::RESISTANCE_RATIO),
    ),
    (
        "geometry_factor",
        None,
        "van der Pauw f of R_s = pi (R_A + R_B) f / (2 ln 2); null unless both were measured",
        Source::Float(float_column::GEOMETRY_FACTOR),
    ),
    (
        "sheet_resistance_ohm_sq",
        Some("ohm_sq"),
        "sheet resistance from van der Pauw's exact equation, null unless R_A and R_B were both measured (Hall bar: R_xx W / L)",
        Source::Float(float_column::SHEET_RESISTANCE),
    ),
    (
        "sheet_resistance_ohm_sq_unc",
        Some("ohm_sq"),
        "total standard uncertainty: _unc_stat and _unc_sys in quadrature",
        Source::Float(float_column::SHEET_RESISTANCE_UNC),
    ),
    (
        "sheet_resistance_ohm_sq_unc_stat",
        Some("ohm_sq"),
        "statistical part (Type A): the scatter of the readings, or the sample's pooled reading noise if larger",
        Source::Float(float_column::SHEET_RESISTANCE_UNC_STAT),
    ),
    (
        "sheet_resistance_ohm_sq_unc_sys",
        Some("ohm_sq"),
        "systematic part (Type B): the calibrations, common to every row of the sample; apply once, after a fit",
        Source::Float(float_column::SHEET_RESISTANCE_UNC_SYS),
    ),
    (
        "resistivity_ohm_m",
        Some("ohm_m"),
        "R_s t; null for a 2D sample",
        Source::Float(float_column::RESISTIVITY),
    ),
    (
        "resistivity_ohm_m_unc",
        Some("ohm_m"),
        "total standard uncertainty: _unc_stat and _unc_sys in quadrature",
        Source::Float(float_column::RESISTIVITY_UNC),
    ),
    (
        "resistivity_ohm_m_unc_stat",
        Some("ohm_m"),
        "statistical part (Type A): the scatter of the readings, or the sample's pooled reading noise if larger",
        Source::Float(float_column::RESISTIVITY_UNC_STAT),
    ),
    (
        "resistivity_ohm_m_unc_sys",
        Some("ohm_m"),
        "systematic part (Type B): the calibrations, common to every row of the sample; apply once, after a fit",
        Source::Float(float_column::RESISTIVITY_UNC_SYS),
    ),
    (
        "hall_resistance_ohm",
        Some("ohm"),
        "R_xy at field_T, positive for holes",
        Source::Float(float_column::HALL_RESISTANCE),
    ),
    (
        "hall_resistance_ohm_unc",
        Some("ohm"),
        "standard uncertainty",
        Source::Float(float_column::HALL_RESISTANCE_UNC),
    ),
    (
        "sheet_hall_coefficient_m2_per_C",
        Some("m2_per_C"),
        "R_Hs = R_xy / |B|",
        Source::Float(float_column::SHEET_HALL_COEFFICIENT),
    ),
    (
        "sheet_hall_coefficient_m2_per_C_unc",
        Some("m2_per_C"),
        "standard uncertainty",
        Source::Float(float_column::SHEET_HALL_COEFFICIENT_UNC),
    ),
    (
        "hall_coefficient_m3_per_C",
        Some("m3_per_C"),
        "R_H = R_Hs t; null for a 2D sample",
        Source::Float(float_column::HALL_COEFFICIENT),
    ),
    (
        "hall_coefficient_m3_per_C_unc",
        Some("m3_per_C"),
        "standard uncertainty",
        Source::Float(float_column::HALL_COEFFICIENT_UNC),
    ),
    (
        "carrier_type",
        None,
        "n or p from the sign of the Hall coefficient",
        Source::Carrier,
    ),
    (
        "sheet_density_m2",
        Some("m^-2"),
        "r_H / (e |R_Hs|)",
        Source::Float(float_column::SHEET_DENSITY),
    ),
    (
        "sheet_density_m2_unc",
        Some("m^-2"),
        "total standard uncertainty: _unc_stat and _unc_sys in quadrature",
        Source::Float(float_column::SHEET_DENSITY_UNC),
    ),
    (
        "sheet_density_m2_unc_stat",
        Some("m^-2"),
        "statistical part (Type A): the scatter of the readings, or the sample's pooled reading noise if larger",
        Source::Float(float_column::SHEET_DENSITY_UNC_STAT),
    ),
    (
        "sheet_density_m2_unc_sys",
        Some("m^-2"),
        "systematic part (Type B): the calibrations, common to every row of the sample; apply once, after a fit",
        Source::Float(float_column::SHEET_DENSITY_UNC_SYS),
    ),
    (
        "density_m3",
        Some("m^-3"),
        "sheet density / t; null for a 2D sample",
        Source::Float(float_column::DENSITY),
    ),
    (
        "density_m3_unc",
        Some("m^-3"),
        "total standard uncertainty: _unc_stat and _unc_sys in quadrature",
        Source::Float(float_column::DENSITY_UNC),
    ),
    (
        "density_m3_unc_stat",
        Some("m^-3"),
        "statistical part (Type A): the scatter of the readings, or the sample's pooled reading noise if larger",
        Source::Float(float_column::DENSITY_UNC_STAT),
    ),
    (
        "density_m3_unc_sys",
        Some("m^-3"),
        "systematic part (Type B): the calibrations, common to every row of the sample; apply once, after a fit",
        Source::Float(float_column::DENSITY_UNC_SYS),
    ),
    (
        "hall_mobility_m2_per_Vs",
        Some("m2_per_Vs"),
        "|R_Hs| / R_s",
        Source::Float(float_column::HALL_MOBILITY),
    ),
    (
        "hall_mobility_m2_per_Vs_unc",
        Some("m2_per_Vs"),
        "total standard uncertainty: _unc_stat and _unc_sys in quadrature",
        Source::Float(float_column::HALL_MOBILITY_UNC),
    ),
    (
        "hall_mobility_m2_per_Vs_unc_stat",
        Some("m2_per_Vs"),
        "statistical part (Type A): the scatter of the readings, or the sample's pooled reading noise if larger",
        Source::Float(float_column::HALL_MOBILITY_UNC_STAT),
    ),
    (
        "hall_mobility_m2_per_Vs_unc_sys",
        Some("m2_per_Vs"),
        "systematic part (Type B): the calibrations, common to every row of the sample; apply once, after a fit",
        Source::Float(float_column::HALL_MOBILITY_UNC_SYS),
    ),
    (
        "drift_mobility_m2_per_Vs",
        Some("m2_per_Vs"),
        "Hall mobility / r_H",
        Source::Float(float_column::DRIFT_MOBILITY),
    ),
    (
        "drift_mobility_m2_per_Vs_unc",
        Some("m2_per_Vs"),
        "standard uncertainty",
        Source::Float(float_column::DRIFT_MOBILITY_UNC),
    ),
    (
        "hall_factor",
        None,
        "Hall scattering factor r_H used",
        Source::Float(float_column::HALL_FACTOR),
    ),
    (
        "reciprocity_mismatch",
        None,
        "largest |direct - reciprocal| / mean of R_A and R_B",
        Source::Float(float_column::RECIPROCITY_MISMATCH),
    ),
    (
        "current_reversal_mismatch",
        None,
        "largest |R(+I) - R(-I)| / mean",
        Source::Float(float_column::CURRENT_REVERSAL_MISMATCH),
    ),
    (
        "hall_spread",
        None,
        "(max - min) / |mean| of the Hall resistances of the configurations and current polarities (of the polarities only when one configuration was measured)",
        Source::Float(float_column::HALL_SPREAD),
    ),
    (
        "thermoelectric_offset_ratio",
        None,
        "largest |V_offset| / |R I|",
        Source::Float(float_column::THERMOELECTRIC_OFFSET_RATIO),
    ),
    (
        "misalignment_ratio",
        None,
        "largest field-even / field-odd part of the Hall configurations",
        Source::Float(float_column::MISALIGNMENT_RATIO),
    ),
    (
        "drift_corrected",
        None,
        "true when the readings of a drifting stage were brought to the group's mean temperature with the series' own slopes",
        Source::DriftCorrected,
    ),
    (
        "reading_noise_V",
        Some("V"),
        "pooled standard deviation of one reading's voltage over the sample's series",
        Source::Float(float_column::READING_NOISE_V),
    ),
    (
        "flags",
        None,
        "raised quality flags, comma-separated",
        Source::Flags,
    ),
    (
        "quality_ok",
        None,
        "true when no flag is raised",
        Source::QualityOk,
    ),
];

fn column_type(source: &Source) -> ColumnType {
    match source {
        Source::Float(_) => ColumnType::F64,
        Source::Sample | Source::Geometry | Source::Carrier | Source::Flags => ColumnType::Str,
        Source::ReadingCount => ColumnType::I64,
        Source::DriftCorrected | Source::QualityOk => ColumnType::Bool,
    }
}

/// The sample column as runs of consecutive readings of one sample. Consecutive Arrow string
/// views that are equal hold the same text (the view is the length, the first bytes and
/// the place of the rest, or the whole text when it is short), so a run costs one 16-byte
/// comparison per reading; only where the views differ are the texts compared. A long
/// column's views are walked in two halves at once (the walk reads 16 bytes per reading and
/// waits on memory); a run cut by the halves' border is joined again by its name.
fn sample_runs(column: &StringChunked) -> Result<Vec<reduce::SampleRun<'_>>, AnalysisError> {
    use polars_arrow::array::Array;
    let mut runs: Vec<reduce::SampleRun<'_>> = Vec::new();
    let mut row = 0usize;
    for array in column.downcast_iter() {
        if array.null_count() > 0 {
            let first_null = (0..array.len()).find(|&index| array.is_null(index)).unwrap_or(0);
            return Err(AnalysisError::InvalidInput(format!(
                "reading in {}: `sample` is empty; name the sample of every reading",
                data_row(row + first_null)
            )));
        }
        let views = array.views();
        let halves = if views.len() >= PARALLEL_VIEWS {
            let middle = views.len() / 2;
            let (first, second) = rayon::join(
                || equal_view_runs(&views[..middle], 0),
                || equal_view_runs(&views[middle..], middle),
            );
            [first, second]
        } else {
            [equal_view_runs(views, 0), Vec::new()]
        };
        for range in halves.into_iter().flatten() {
            let name = array.value(range.start);
            match runs.last_mut() {
                Some(run) if run.name == name => run.length += range.len(),
                _ => runs.push(reduce::SampleRun {
                    name,
                    length: range.len(),
                }),
            }
        }
        row += array.len();
    }
    Ok(runs)
}

/// Below this many readings an array's views are walked on one thread.
const PARALLEL_VIEWS: usize = 200_000;

/// The runs of equal views, as index ranges shifted by `offset`. Eight views are compared
/// at a time, without a branch per view, until a block holds a change.
fn equal_view_runs(views: &[polars_arrow::array::View], offset: usize) -> Vec<std::ops::Range<usize>> {
    const BLOCK: usize = 8;
    let mut runs = Vec::new();
    let mut start = 0usize;
    while start < views.len() {
        let first = views[start].as_u128();
        let mut end = start + 1;
        while end + BLOCK <= views.len()
            && views[end..end + BLOCK]
                .iter()
                .fold(0u128, |differ, view| differ | (view.as_u128() ^ first))
                == 0
        {
            end += BLOCK;
        }
        end += views[end..].iter().take_while(|view| view.as_u128() == first).count();
        runs.push(start + offset..end + offset);
        start = end;
    }
    runs
}

/// The text of a row's flags, comma-separated in the order of [`flags::ALL`]: each distinct
/// set is joined once.
struct FlagTexts(Vec<Option<String>>);

impl FlagTexts {
    fn new() -> Self {
        FlagTexts(vec![None; 1 << flags::ALL.len()])
    }

    fn text(&mut self, set: FlagSet) -> &str {
        self.0[set.0 as usize].get_or_insert_with(|| set.iter().collect::<Vec<_>>().join(","))
    }

    /// The text of a set already asked for with [`FlagTexts::text`].
    fn written(&self, set: FlagSet) -> &str {
        self.0[set.0 as usize].as_deref().expect("the text was written")
    }
}

/// The runs of equal values of a column, as (first row, rows), in row order: the text
/// columns are built a run at a time ([`sdk::text_runs_column`]).
fn equal_runs<T: PartialEq>(values: &[T]) -> impl Iterator<Item = (usize, usize)> + '_ {
    let mut start = 0usize;
    std::iter::from_fn(move || {
        let first = values.get(start)?;
        let rows = 1 + values[start + 1..].iter().take_while(|value| *value == first).count();
        let run = (start, rows);
        start += rows;
        Some(run)
    })
}

/// One output column to build, with the buffer it takes over, if any.
struct ColumnJob {
    name: &'static str,
    source: &'static Source,
    /// The float buffer of a [`Source::Float`] column.
    float: Option<FloatColumn>,
    /// The counts of [`Source::ReadingCount`].
    counts: Option<Vec<i64>>,
}

/// Below this many output rows the columns are built one after the other.
const PARALLEL_OUTPUT_ROWS: usize = 2_000;

/// The output table from the reduction's columns: the float buffers are moved into the
/// table as they are (a validity bitmap added where a column has nulls), the text columns
/// are built once per row. The columns are independent, so a large table builds them in
/// parallel; they join the output in the declared order.
fn output_table(mut table: ReductionTable, output: &mut OutputBuilder) {
    let height = table.height;
    // What each column owns: its float buffer or the reading counts, moved in.
    let mut floats: Vec<Option<FloatColumn>> = std::mem::take(&mut table.floats).into_iter().map(Some).collect();
    let mut reading_count = Some(std::mem::take(&mut table.reading_count));
    let jobs: Vec<ColumnJob> = OUTPUT
        .iter()
        .map(|(name, _, _, source)| {
            let float = match source {
                Source::Float(index) => floats[*index].take(),
                _ => None,
            };
            let counts = match source {
                Source::ReadingCount => reading_count.take(),
                _ => None,
            };
            ColumnJob {
                name,
                source,
                float,
                counts,
            }
        })
        .collect();
    let table = &table;
    let build = |ColumnJob {
                     name,
                     source,
                     float,
                     counts,
                 }| {
        let name = PlSmallStr::from_static(name);
        match source {
            Source::Float(_) => {
                let column = float.expect("each float column is moved in once");
                column.into_column(name)
            }
            Source::Sample => sdk::text_runs_column(
                name,
                table
                    .samples
                    .iter()
                    .map(|(sample, _, rows)| (Some(sample.as_str()), *rows)),
            ),
            Source::Geometry => sdk::text_runs_column(
                name,
                table.samples.iter().map(|(_, geometry, rows)| (Some(*geometry), *rows)),
            ),
            Source::Carrier => sdk::text_runs_column(
                name,
                equal_runs(&table.carrier).map(|(row, rows)| (table.carrier_type(row), rows)),
            ),
            Source::ReadingCount => {
                Int64Chunked::from_vec(name, counts.expect("the reading counts are moved in once")).into_column()
            }
            Source::DriftCorrected => BooleanChunked::from_slice(name, &table.drift_corrected).into_column(),
            Source::Flags => {
                let mut flag_texts = FlagTexts::new();
                let runs: Vec<(FlagSet, usize)> = equal_runs(&table.flags)
                    .map(|(row, rows)| {
                        flag_texts.text(table.flags[row]);
                        (table.flags[row], rows)
                    })
                    .collect();
                sdk::text_runs_column(
                    name,
                    runs.iter().map(|(set, rows)| (Some(flag_texts.written(*set)), *rows)),
                )
            }
            Source::QualityOk => {
                BooleanChunked::from_iter_values(name, table.flags.iter().map(|set| set.is_empty())).into_column()
            }
        }
    };
    let columns: Vec<Column> = if height >= PARALLEL_OUTPUT_ROWS {
        use rayon::prelude::*;
        jobs.into_par_iter().map(build).collect()
    } else {
        jobs.into_iter().map(build).collect()
    };
    for column in columns {
        // The builder takes the ready column as it is: no copy.
        output.column(column);
    }
}

/// A float column as a slice: zero-copy when it has one chunk and no nulls (nulls become NaN,
/// which the reduction reports by row).
fn floats<'a>(frame: &'a DataFrame, name: &str, storage: &'a mut Vec<f64>) -> Result<&'a [f64], AnalysisError> {
    let column = frame
        .column(name)
        .map_err(|_| AnalysisError::InvalidInput(format!("column `{name}` is missing from the readings")))?;
    let values = column
        .f64()
        .map_err(|_| AnalysisError::InvalidInput(format!("column `{name}` must hold numbers")))?;
    if let Ok(slice) = values.cont_slice() {
        return Ok(slice);
    }
    *storage = values.iter().map(|v| v.unwrap_or(f64::NAN)).collect();
    Ok(storage)
}

fn integers<'a>(frame: &'a DataFrame, name: &str, storage: &'a mut Vec<i64>) -> Result<&'a [i64], AnalysisError> {
    let column = frame
        .column(name)
        .map_err(|_| AnalysisError::InvalidInput(format!("column `{name}` is missing from the readings")))?;
    let values = column
        .i64()
        .map_err(|_| AnalysisError::InvalidInput(format!("column `{name}` must hold whole contact numbers")))?;
    if let Ok(slice) = values.cont_slice() {
        return Ok(slice);
    }
    // An empty cell is an invalid reading, refused or skipped (skip_invalid_readings) by the
    // reduction like any other, with the column it lacks.
    *storage = values
        .iter()
        .map(|value| value.unwrap_or(reduce::EMPTY_CONTACT))
        .collect();
    Ok(storage)
}

const CONTACT_COLUMNS: [&str; 4] = ["i_in", "i_out", "v_pos", "v_neg"];

/// The four contact numbers of every reading: from the columns i_in, i_out, v_pos, v_neg,
/// or from a `contacts` column in pair notation ("21,34"). With both, they must agree.
fn contact_columns<'a>(frame: &'a DataFrame, storage: [&'a mut Vec<i64>; 4]) -> Result<[&'a [i64]; 4], AnalysisError> {
    let present: Vec<&str> = CONTACT_COLUMNS
        .into_iter()
        .filter(|name| frame.column(name).is_ok())
        .collect();
    let notation = frame.column("contacts").ok();
    let Some(notation) = notation else {
        if present.len() < 4 {
            let missing: Vec<&str> = CONTACT_COLUMNS
                .into_iter()
                .filter(|name| !present.contains(name))
                .collect();
            return Err(AnalysisError::InvalidInput(format!(
                "the readings need either a `contacts` column in pair notation (\"21,34\" = current in at 2, out at 1, voltage V3 - V4) or the four columns i_in, i_out, v_pos, v_neg; {} missing",
                missing.join(", ")
            )));
        }
        let [s1, s2, s3, s4] = storage;
        return Ok([
            integers(frame, "i_in", s1)?,
            integers(frame, "i_out", s2)?,
            integers(frame, "v_pos", s3)?,
            integers(frame, "v_neg", s4)?,
        ]);
    };
    let cells = notation.str().map_err(|_| {
        AnalysisError::InvalidInput(
            "column `contacts` must hold text in pair notation such as \"21,34\"; import it as text (quote the cells)"
                .into(),
        )
    })?;
    let mut parsed: Vec<[i64; 4]> = Vec::with_capacity(cells.len());
    for (row, cell) in cells.iter().enumerate() {
        // An empty cell is an invalid reading, as an empty contact column's cell is.
        let Some(cell) = cell else {
            parsed.push([reduce::EMPTY_CONTACTS_CELL; 4]);
            continue;
        };
        let contacts = mobilis_physics::contacts::parse_pair_notation(cell)
            .map_err(|error| AnalysisError::InvalidInput(format!("reading in {}: {error}", data_row(row))))?;
        parsed.push(contacts);
    }
    if !present.is_empty() {
        let mut given = [Vec::new(), Vec::new(), Vec::new(), Vec::new()];
        for (index, name) in CONTACT_COLUMNS.into_iter().enumerate() {
            if present.contains(&name) {
                given[index] = integers(frame, name, &mut Vec::new())?.to_vec();
            }
        }
        for (row, contacts) in parsed.iter().enumerate() {
            for (index, name) in CONTACT_COLUMNS.into_iter().enumerate() {
                if let Some(&value) = given[index].get(row) {
                    let either_empty = value == reduce::EMPTY_CONTACT || contacts[index] == reduce::EMPTY_CONTACTS_CELL;
                    if !either_empty && value != contacts[index] {
                        return Err(AnalysisError::InvalidInput(format!(
                            "reading in {}: `contacts` says {name} = {}, the column {name} says {value}; give one of the two, or make them agree",
                            data_row(row),
                            contacts[index]
                        )));
                    }
                }
            }
        }
    }
    fn fill(target: &mut Vec<i64>, values: impl Iterator<Item = i64>) -> &[i64] {
        *target = values.collect();
        target
    }
    let [s1, s2, s3, s4] = storage;
    Ok([
        fill(s1, parsed.iter().map(|c| c[0])),
        fill(s2, parsed.iter().map(|c| c[1])),
        fill(s3, parsed.iter().map(|c| c[2])),
        fill(s4, parsed.iter().map(|c| c[3])),
    ])
}

/// Reads the sample sheet (role `samples`).
fn sample_sheet(frame: &DataFrame) -> Result<Vec<SampleInfo>, AnalysisError> {
    let names = sdk::string_column(frame, "sample")?;
    // A column with no value at all is nulls whatever its type: a spreadsheet column left
    // empty (a 2D sheet's thickness_m) imports as text.
    let is_empty = |name: &str| {
        frame
            .column(name)
            .is_ok_and(|column| column.null_count() == column.len())
    };
    let sheet_floats = |name: &str, unit: &str| -> Result<Vec<Option<f64>>, AnalysisError> {
        if is_empty(name) {
            return Ok(vec![None; frame.height()]);
        }
        sdk::float_column(frame, name).map_err(|error| match frame.column(name) {
            Ok(column) => AnalysisError::InvalidInput(format!(
                "sample sheet column `{name}` holds {}, not numbers; give numbers{unit} in it (an empty cell is no value) and import the sheet again",
                column.dtype()
            )),
            Err(_) => error,
        })
    };
    let thickness = sheet_floats("thickness_m", " in metres, empty for a 2D sheet,")?;
    let optional_floats = |name: &str| -> Result<Vec<Option<f64>>, AnalysisError> {
        if frame.column(name).is_ok() {
            sheet_floats(name, "")
        } else {
            Ok(vec![None; frame.height()])
        }
    };
    let thickness_unc = optional_floats("thickness_m_unc")?;
    let hall_factor = optional_floats("hall_factor")?;
    let bar_length = optional_floats("bar_length_m")?;
    let bar_width = optional_floats("bar_width_m")?;
    let field_calibration = optional_floats(calibration_names::FIELD)?;
    let current_calibration = optional_floats(calibration_names::CURRENT)?;
    let voltage_calibration = optional_floats(calibration_names::VOLTAGE)?;
    let temperature_accuracy = optional_floats(calibration_names::TEMPERATURE)?;
    let geometry = if frame.column("geometry").is_ok() && !is_empty("geometry") {
        sdk::string_column(frame, "geometry")?
    } else {
        vec![None; frame.height()]
    };

    let mut samples: Vec<SampleInfo> = Vec::with_capacity(frame.height());
    for row in 0..frame.height() {
        let name = names[row]
            .clone()
            .ok_or_else(|| AnalysisError::InvalidInput(format!("sample sheet row {row}: `sample` is empty")))?;
        if samples.iter().any(|s| s.name == name) {
            return Err(AnalysisError::InvalidInput(format!(
                "sample sheet lists `{name}` twice; keep one row per sample"
            )));
        }
        let geometry = match geometry[row].as_deref() {
            None | Some("van_der_pauw") | Some("vdp") => Geometry::VanDerPauw,
            Some("hall_bar") => match (bar_length[row], bar_width[row]) {
                (Some(length_m), Some(width_m)) => Geometry::HallBar { length_m, width_m },
                _ => {
                    return Err(AnalysisError::InvalidInput(format!(
                        "sample `{name}` is a hall_bar: give bar_length_m (between the longitudinal voltage contacts) and bar_width_m"
                    )))
                }
            },
            Some(other) => {
                return Err(AnalysisError::InvalidInput(format!(
                    "sample `{name}`: geometry `{other}` is unknown; use van_der_pauw or hall_bar"
                )))
            }
        };
        samples.push(SampleInfo {
            name,
            thickness_m: thickness[row],
            thickness_unc_m: thickness_unc[row],
            hall_factor: hall_factor[row].unwrap_or(1.0),
            geometry,
            calibration: Calibration {
                field_rel: field_calibration[row],
                current_rel: current_calibration[row],
                voltage_rel: voltage_calibration[row],
                temperature_accuracy_k: temperature_accuracy[row],
            },
        });
    }
    Ok(samples)
}

/// The flags column's description followed by every flag and what raises it.
fn flags_description(description: &str) -> String {
    let listed: Vec<String> = flags::DESCRIPTIONS
        .iter()
        .map(|(flag, meaning)| format!("{flag}: {meaning}"))
        .collect();
    format!("{description}: {}", listed.join("; "))
}

fn column(name: &str, dtype: ColumnType, unit: Option<&str>, description: &str) -> ColumnSpec {
    ColumnSpec::new(name, dtype, unit, description)
}

impl Analysis for HallReduce {
    const NAME: &'static str = "hall.reduce";
    type Params = ReduceParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Raw van der Pauw or Hall-bar readings to sheet resistance, resistivity, carrier type, density and Hall mobility per sample, temperature and field".into(),
            description: "Resistances from whichever configurations are present (current reversal by source sign or swapped leads), sheet resistance from van der Pauw's exact equation, Hall coefficient from the field-odd part of the diagonal (or transverse) configurations, so thermoelectric and misalignment offsets cancel. Uncertainty budget: _unc is the total, _unc_stat the reading noise pooled over the row's fit residuals and redundant configurations, _unc_sys the calibrations (thickness, field, current, voltage) common to a sample's series; temperature_K_unc the thermometer accuracy. Readings of a drifting stage are brought to the mean temperature; |B| up to zero_field_tolerance_T (10 mT) is zero field; field setpoints are never wider than field_tolerance_T. Van der Pauw's equation needs both R_A and R_B: a row without either has a null sheet resistance and mobility (flag missing_configurations, and a warning naming what to measure), never one assumed from the other, unless assume_symmetric_sample states the sample symmetric (then R_s = pi R / ln 2, flag assumed_symmetric). Quality flags with configurable thresholds (the flags column lists them). Contact numbering, with configurations in pair notation (current in and out, then the voltage V+ V-): van der Pauw contacts 1-4 counterclockwise seen from the +B side, R_A from 21,34 and 43,12, R_B from 32,41 and 14,23, Hall from 13,24 and 24,31. Hall bar contacts 1-6: the current flows between 1 and 2 along the bar, 3 and 4 sit on the edge to the left of the current from 1 to 2 seen from the +B side, 5 opposite 3 and 6 opposite 4; longitudinal pairs 12,34 and 12,56, transverse (Hall) pairs 12,53 and 12,64.".into(),
            inputs: vec![
                InputRole {
                    role: "readings".into(),
                    required: true,
                    description: "one row per four-terminal reading".into(),
                    columns: vec![
                        column("sample", Str, None, "sample name"),
                        column("temperature_K", F64, Some("K"), "sample temperature"),
                        column("field_T", F64, Some("T"), "magnetic field, signed"),
                        column("i_in", I64, None, "contact the current enters (or give contacts)").optional(),
                        column("i_out", I64, None, "contact the current leaves (or give contacts)").optional(),
                        column("v_pos", I64, None, "voltmeter positive contact (or give contacts)").optional(),
                        column("v_neg", I64, None, "voltmeter negative contact (or give contacts)").optional(),
                        column("contacts", Str, None, "instead of i_in, i_out, v_pos, v_neg: the configuration in pair notation, \"21,34\" = current in at 2, out at 1, voltage V3 - V4").optional(),
                        column("current_A", F64, Some("A"), "current entering at i_in; negative for a reversed source"),
                        column("voltage_V", F64, Some("V"), "V(v_pos) - V(v_neg)"),
                    ],
                },
                InputRole {
                    role: "samples".into(),
                    required: false,
                    description: "the sample sheet; without it every sample is a 2D van der Pauw sample with Hall factor 1".into(),
                    columns: vec![
                        column("sample", Str, None, "sample name"),
                        column("thickness_m", F64, Some("m"), "conducting thickness; null for a 2D sheet"),
                        column("thickness_m_unc", F64, Some("m"), "standard uncertainty of the thickness").optional(),
                        column("hall_factor", F64, None, "Hall scattering factor r_H (default 1)").optional(),
                        column("geometry", Str, None, "van_der_pauw (default) or hall_bar").optional(),
                        column("bar_length_m", F64, Some("m"), "Hall bar: distance between the longitudinal voltage contacts").optional(),
                        column("bar_width_m", F64, Some("m"), "Hall bar: width").optional(),
                        column(calibration_names::FIELD, F64, None, "relative standard uncertainty of the field scale (overrides the parameter)").optional(),
                        column(calibration_names::CURRENT, F64, None, "relative standard uncertainty of the current scale (overrides the parameter)").optional(),
                        column(calibration_names::VOLTAGE, F64, None, "relative standard uncertainty of the voltmeter gain (overrides the parameter)").optional(),
                        column(calibration_names::TEMPERATURE, F64, Some("K"), "standard uncertainty of the thermometer (overrides the parameter)").optional(),
                    ],
                },
            ],
            outputs: OUTPUT.iter().map(|(name, unit, description, getter)| match getter {
                // The flags column says what each flag means, from the one list of them.
                Source::Flags => column(name, column_type(getter), *unit, &flags_description(description)),
                _ => column(name, column_type(getter), *unit, description),
            }).collect(),
            summary_keys: vec![
                column("rows", I64, None, "rows of the output table"),
                column("samples", Str, None, "list of the samples reduced"),
                column("flagged_rows", I64, None, "rows with at least one quality flag"),
                column("flag_counts", Str, None, "object: rows raising each flag"),
                column("skipped_readings", I64, None, "invalid readings dropped under skip_invalid_readings"),
                column("calibrations", Str, None, "object per sample: the calibrations used (relative standard uncertainties, temperature_accuracy_K), the names not stated and assumed, and reading_noise_V, the pooled voltage noise of one reading"),
                column("calibrations_not_stated", Str, None, "list of the calibration parameters some sample did not state (their defaults were assumed)"),
            ],
            figures: crate::figures::reduce(),
            ..Default::default()
        }
    }

    fn run(params: ReduceParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let readings = inputs.required("readings")?;
        let samples = inputs.optional("samples").map(sample_sheet).transpose()?;
        host.progress(0.0, "reading columns");

        let sample_column = readings
            .column("sample")
            .map_err(|_| AnalysisError::InvalidInput("column `sample` is missing from the readings".into()))?
            .str()
            .map_err(|_| AnalysisError::InvalidInput("column `sample` must hold text".into()))?;
        let sample_runs = sample_runs(sample_column)?;
        let (mut s1, mut s2, mut s3, mut s4) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
        let (mut c1, mut c2, mut c3, mut c4) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
        let [i_in, i_out, v_pos, v_neg] = contact_columns(readings, [&mut c1, &mut c2, &mut c3, &mut c4])?;
        let columns = ReadingColumns {
            sample_runs: &sample_runs,
            temperature_k: floats(readings, "temperature_K", &mut s1)?,
            field_t: floats(readings, "field_T", &mut s2)?,
            i_in,
            i_out,
            v_pos,
            v_neg,
            current_a: floats(readings, "current_A", &mut s3)?,
            voltage_v: floats(readings, "voltage_V", &mut s4)?,
        };
        host.check_cancelled()?;
        let mut reduction = reduce::reduce_to_table(&columns, samples.as_deref(), &params.settings())
            .map_err(|error| AnalysisError::InvalidInput(error.to_string()))?;
        host.progress(0.9, "building the output table");

        // One pass over the flag sets counts every flag.
        let mut counts = [0usize; flags::ALL.len()];
        let mut flagged_rows = 0usize;
        for set in &reduction.flags {
            flagged_rows += usize::from(!set.is_empty());
            for (index, count) in counts.iter_mut().enumerate() {
                *count += usize::from(set.0 & (1 << index) != 0);
            }
        }
        let flag_counts: serde_json::Map<String, serde_json::Value> = flags::ALL
            .iter()
            .zip(counts)
            .filter(|(_, count)| *count != 0)
            .map(|(flag, count)| (flag.to_string(), json!(count)))
            .collect();
        let mut sample_list: Vec<&str> = reduction.samples.iter().map(|(name, _, _)| name.as_str()).collect();
        sample_list.dedup();
        let sample_list = json!(sample_list);
        let row_count = reduction.height;
        let warnings = std::mem::take(&mut reduction.warnings);
        let skipped_readings = reduction.skipped_readings;
        let calibration_list = std::mem::take(&mut reduction.calibrations);
        let mut output = OutputBuilder::of::<Self>();
        output_table(reduction, &mut output);
        output
            .summary("rows", row_count)
            .summary("samples", sample_list)
            .summary("flagged_rows", flagged_rows)
            .summary("flag_counts", flag_counts)
            .summary("skipped_readings", skipped_readings);
        let calibrations: serde_json::Map<String, serde_json::Value> = calibration_list
            .iter()
            .map(|used| {
                (
                    used.sample.clone(),
                    json!({
                        "thickness_rel": used.thickness_rel,
                        "field_calibration_rel": used.field_rel,
                        "current_calibration_rel": used.current_rel,
                        "voltage_calibration_rel": used.voltage_rel,
                        "temperature_accuracy_K": used.temperature_accuracy_k,
                        "not_stated": used.not_stated,
                        "reading_noise_V": used.reading_noise_v,
                    }),
                )
            })
            .collect();
        let mut not_stated: Vec<&str> = Vec::new();
        for used in &calibration_list {
            for name in &used.not_stated {
                if !not_stated.contains(name) {
                    not_stated.push(name);
                }
            }
        }
        output
            .summary("calibrations", calibrations)
            .summary("calibrations_not_stated", not_stated)
            .warnings(warnings);
        let output = output.finish(row_count)?;
        host.progress(1.0, "done");
        Ok(output)
    }
}

mobilis_sdk::export_plugin!(name: "hall", analyses: [HallReduce]);

#[cfg(test)]
mod tests {
    //! The table glue: calibration parameters and sample-sheet columns in, budget columns and
    //! summary keys out, through the SDK without the C boundary.

    use super::*;
    use mobilis_numerics::noise::Rng;
    use mobilis_physics::forward::readings::{
        van_der_pauw_readings, MeasurementProtocol, VanDerPauwSample, VoltageNoise,
    };
    use mobilis_sdk::sdk::run_typed;

    // The description is where a user reads the contact numbering, and the flags column's
    // description lists every flag: neither sends the user to a file outside the daemon.
    #[test]
    fn the_declaration_states_the_contact_numbering_and_the_flags() {
        let declaration = HallReduce::declaration();
        assert!(!declaration.description.contains("DEVELOPERS"));
        for words in [
            "counterclockwise seen from the +B side",
            "R_B from 32,41 and 14,23",
            "Hall bar contacts 1-6",
            "5 opposite 3 and 6 opposite 4",
            "transverse (Hall) pairs 12,53 and 12,64",
        ] {
            assert!(declaration.description.contains(words), "{words:?} missing");
        }
        let flags_column = declaration
            .outputs
            .iter()
            .find(|column| column.name == "flags")
            .expect("a flags column");
        for flag in flags::ALL {
            assert!(
                flags_column.description.contains(&format!("{flag}: ")),
                "{flag} is not described"
            );
        }
        for output in &declaration.outputs {
            assert!(!output.description.contains("DEVELOPERS"), "{}", output.name);
        }
    }

    // Runs of the sample column: short names (held in the view) and long ones (in a data
    // buffer), a name that comes back after another, a run across two chunks, and a null.
    #[test]
    fn sample_runs_follow_the_column_across_chunks() {
        let long = "a-sample-name-longer-than-a-view";
        let mut column = StringChunked::new("sample".into(), [long, long, "s1", "s1", long]);
        column
            .append(&StringChunked::new("sample".into(), [long, "s2", long, long]))
            .unwrap();
        assert_eq!(column.chunks().len(), 2);
        let runs: Vec<(&str, usize)> = sample_runs(&column)
            .unwrap()
            .iter()
            .map(|run| (run.name, run.length))
            .collect();
        assert_eq!(runs, [(long, 2), ("s1", 2), (long, 2), ("s2", 1), (long, 2)]);

        let with_null = StringChunked::new("sample".into(), [Some("s1"), Some("s1"), None]);
        let AnalysisError::InvalidInput(message) = sample_runs(&with_null).unwrap_err() else {
            panic!("a null sample is invalid input");
        };
        assert!(
            message.starts_with("reading in data row 3 (offset 2): `sample` is empty"),
            "{message}"
        );
    }

    /// A column long enough to be walked in two halves gives the runs of a walk from the
    /// start: runs of every length around the blocks of eight views, a run across the
    /// halves' border, one reading alone, and a name that comes back after another.
    #[test]
    fn sample_runs_of_a_long_column_walked_in_halves() {
        let long = "a-sample-name-longer-than-a-view";
        let lengths = [1usize, 7, 8, 9, 16, 17, 3, 1, 150_000, 99_999, 100_001, 2, 1, 63];
        let names = [long, "s1", long, "s2"];
        let mut expected: Vec<(&str, usize)> = Vec::new();
        let mut values: Vec<&str> = Vec::new();
        for (index, length) in lengths.iter().enumerate() {
            let name = names[index % names.len()];
            expected.push((name, *length));
            values.extend(std::iter::repeat_n(name, *length));
        }
        assert!(values.len() >= PARALLEL_VIEWS, "the column is walked in halves");
        let middle = values.len() / 2;
        assert!(values[middle - 1] == values[middle], "a run crosses the border");
        let column = StringChunked::new("sample".into(), values);
        let runs: Vec<(&str, usize)> = sample_runs(&column)
            .unwrap()
            .iter()
            .map(|run| (run.name, run.length))
            .collect();
        assert_eq!(runs, expected);
    }

    fn readings_frame() -> DataFrame {
        let sample = VanDerPauwSample::ideal("w1", 77.0, 300.0, 1.1, -600.0);
        let protocol = MeasurementProtocol {
            noise: VoltageNoise {
                absolute_v: 1e-7,
                relative: 0.0,
            },
            ..MeasurementProtocol::van_der_pauw(1e-4, vec![0.5]).with_resistance_at_zero_and_hall_in_field()
        };
        let readings = van_der_pauw_readings(&sample, &protocol, &mut Rng::seeded(3)).unwrap();
        let floats =
            |get: fn(&mobilis_physics::readings::RawReading) -> f64| readings.iter().map(get).collect::<Vec<f64>>();
        let ints =
            |get: fn(&mobilis_physics::readings::RawReading) -> i64| readings.iter().map(get).collect::<Vec<i64>>();
        DataFrame::new(
            readings.len(),
            vec![
                Column::new(
                    "sample".into(),
                    readings.iter().map(|r| r.sample.clone()).collect::<Vec<_>>(),
                ),
                Column::new("temperature_K".into(), floats(|r| r.temperature_k)),
                Column::new("field_T".into(), floats(|r| r.field_t)),
                Column::new("i_in".into(), ints(|r| r.i_in)),
                Column::new("i_out".into(), ints(|r| r.i_out)),
                Column::new("v_pos".into(), ints(|r| r.v_pos)),
                Column::new("v_neg".into(), ints(|r| r.v_neg)),
                Column::new("current_A".into(), floats(|r| r.current_a)),
                Column::new("voltage_V".into(), floats(|r| r.voltage_v)),
            ],
        )
        .unwrap()
    }

    fn sheet_frame(field_calibration: Option<f64>) -> DataFrame {
        DataFrame::new(
            1,
            vec![
                Column::new("sample".into(), vec!["w1"]),
                Column::new("thickness_m".into(), vec![5e-4]),
                Column::new("thickness_m_unc".into(), vec![1e-5]),
                Column::new("field_calibration_rel".into(), vec![field_calibration]),
            ],
        )
        .unwrap()
    }

    fn run(params: &str, field_calibration: Option<f64>) -> Result<AnalysisOutput, AnalysisError> {
        let inputs = Inputs::from_tables([
            ("readings".to_owned(), readings_frame()),
            ("samples".to_owned(), sheet_frame(field_calibration)),
        ]);
        run_typed::<HallReduce>(params, &inputs, &Host::detached())
    }

    #[test]
    fn budget_columns_and_calibration_summary() {
        let output = run(
            r#"{"current_calibration_rel": 0.002, "voltage_calibration_rel": 0.0005, "temperature_accuracy_K": 0.01}"#,
            Some(0.01),
        )
        .unwrap();
        for name in [
            "temperature_K_unc",
            "sheet_resistance_ohm_sq_unc_stat",
            "sheet_resistance_ohm_sq_unc_sys",
            "resistivity_ohm_m_unc_stat",
            "resistivity_ohm_m_unc_sys",
            "sheet_density_m2_unc_stat",
            "sheet_density_m2_unc_sys",
            "density_m3_unc_stat",
            "density_m3_unc_sys",
            "hall_mobility_m2_per_Vs_unc_stat",
            "hall_mobility_m2_per_Vs_unc_sys",
            "reading_noise_V",
            "drift_corrected",
        ] {
            assert!(output.table.column(name).is_ok(), "column {name} is missing");
        }
        let declared: Vec<String> = HallReduce::declaration()
            .outputs
            .iter()
            .map(|c| c.name.clone())
            .collect();
        let produced: Vec<String> = output.table.get_column_names().iter().map(|n| n.to_string()).collect();
        assert_eq!(declared, produced);
        let used = &output.summary["calibrations"]["w1"];
        assert_eq!(used["field_calibration_rel"], json!(0.01), "the sheet's value");
        assert_eq!(used["current_calibration_rel"], json!(0.002), "the call's value");
        assert_eq!(used["not_stated"], json!([]));
        assert_eq!(output.summary["calibrations_not_stated"], json!([]));
        // mu_H: the field calibration alone (1 %).
        let mobility = output
            .table
            .column("hall_mobility_m2_per_Vs")
            .unwrap()
            .f64()
            .unwrap()
            .get(0)
            .unwrap();
        let systematic = output
            .table
            .column("hall_mobility_m2_per_Vs_unc_sys")
            .unwrap()
            .f64()
            .unwrap()
            .get(0)
            .unwrap();
        assert!((systematic / mobility - 0.01).abs() < 1e-12);
    }

    #[test]
    fn unstated_calibrations_are_listed_and_bad_ones_refused() {
        let output = run("{}", None).unwrap();
        assert_eq!(
            output.summary["calibrations_not_stated"],
            json!([
                "field_calibration_rel",
                "current_calibration_rel",
                "voltage_calibration_rel",
                "temperature_accuracy_K"
            ])
        );
        assert!(output.warnings.iter().any(|w| w.starts_with("calibrations not stated")));
        let Err(AnalysisError::InvalidInput(message)) = run(r#"{"voltage_calibration_rel": -0.1}"#, None) else {
            panic!("a negative calibration is refused")
        };
        assert!(message.contains("voltage_calibration_rel"), "{message}");
        let Err(AnalysisError::InvalidInput(message)) = run("{}", Some(-1.0)) else {
            panic!("a negative sheet calibration is refused")
        };
        assert!(message.contains("field_calibration_rel of sample \"w1\""), "{message}");
    }

    /// The readings with the four contact columns replaced by `contacts` in pair notation.
    fn with_contacts_notation(frame: &DataFrame) -> DataFrame {
        let contact = |name: &str| frame.column(name).unwrap().i64().unwrap().clone();
        let (a, b, c, d) = (contact("i_in"), contact("i_out"), contact("v_pos"), contact("v_neg"));
        let notation: Vec<String> = (0..frame.height())
            .map(|row| {
                format!(
                    "{}{},{}{}",
                    a.get(row).unwrap(),
                    b.get(row).unwrap(),
                    c.get(row).unwrap(),
                    d.get(row).unwrap()
                )
            })
            .collect();
        let mut converted = frame.drop_many(["i_in", "i_out", "v_pos", "v_neg"]);
        converted.with_column(Column::new("contacts".into(), notation)).unwrap();
        converted
    }

    fn run_readings(readings: DataFrame) -> Result<AnalysisOutput, AnalysisError> {
        let inputs = Inputs::from_tables([("readings".to_owned(), readings)]);
        run_typed::<HallReduce>("{}", &inputs, &Host::detached())
    }

    #[test]
    fn contacts_in_pair_notation_reduce_like_the_four_columns() {
        let four = run_readings(readings_frame()).unwrap();
        let notation_frame = with_contacts_notation(&readings_frame());
        assert!(notation_frame.column("i_in").is_err());
        let notation = run_readings(notation_frame.clone()).unwrap();
        for column in ["sheet_resistance_ohm_sq", "sheet_density_m2", "hall_mobility_m2_per_Vs"] {
            assert_eq!(
                four.table.column(column).unwrap().f64().unwrap().get(0),
                notation.table.column(column).unwrap().f64().unwrap().get(0),
                "{column}"
            );
        }
        // Both given and agreeing is fine; disagreeing names the reading.
        let mut both = readings_frame();
        both.with_column(notation_frame.column("contacts").unwrap().clone())
            .unwrap();
        assert!(run_readings(both.clone()).is_ok());
        let mut cells: Vec<String> = notation_frame
            .column("contacts")
            .unwrap()
            .str()
            .unwrap()
            .iter()
            .map(|c| c.unwrap().to_owned())
            .collect();
        let first = cells[0].clone();
        cells[0] = format!("{},{}", &first[3..5], &first[0..2]);
        both.with_column(Column::new("contacts".into(), cells.clone())).unwrap();
        let Err(AnalysisError::InvalidInput(message)) = run_readings(both) else {
            panic!("disagreeing contacts are refused")
        };
        assert!(
            message.starts_with("reading in data row 1 (offset 0): `contacts` says i_in"),
            "{message}"
        );
        // A malformed cell names its reading and the expected form.
        cells[0] = "21;3".into();
        let mut malformed = notation_frame.clone();
        malformed.with_column(Column::new("contacts".into(), cells)).unwrap();
        let Err(AnalysisError::InvalidInput(message)) = run_readings(malformed) else {
            panic!("a malformed cell is refused")
        };
        assert!(
            message.starts_with("reading in data row 1 (offset 0): `21;3` is not a contact configuration"),
            "{message}"
        );
        assert!(message.contains("\"21,34\""), "{message}");
        // Neither form: the message names both.
        let bare = notation_frame.drop("contacts").unwrap();
        let Err(AnalysisError::InvalidInput(message)) = run_readings(bare) else {
            panic!("readings without contacts are refused")
        };
        assert!(
            message.contains("either a `contacts` column") && message.contains("i_in, i_out, v_pos, v_neg missing"),
            "{message}"
        );
    }

    // An empty contact cell is an invalid reading like a zero current: refused with its
    // reading and column, or skipped with a warning under skip_invalid_readings.
    #[test]
    fn empty_contact_cells_are_invalid_readings() {
        let skip = |frame: DataFrame| {
            let inputs = Inputs::from_tables([("readings".to_owned(), frame)]);
            run_typed::<HallReduce>(r#"{"skip_invalid_readings": true}"#, &inputs, &Host::detached())
        };
        let complete = readings_frame();
        let mut i_in: Vec<Option<i64>> = complete.column("i_in").unwrap().i64().unwrap().iter().collect();
        i_in[1] = None;
        let mut with_empty = complete.clone();
        with_empty.with_column(Column::new("i_in".into(), i_in)).unwrap();
        let Err(AnalysisError::InvalidInput(message)) = run_readings(with_empty.clone()) else {
            panic!("an empty contact is refused without skip_invalid_readings")
        };
        assert!(
            message.starts_with("reading in data row 2 (offset 1), sample \"w1\": `i_in` is empty"),
            "{message}"
        );
        assert!(message.contains("skip_invalid_readings"), "{message}");
        let output = skip(with_empty).unwrap();
        assert_eq!(output.summary["skipped_readings"], json!(1));
        assert!(
            output.warnings.iter().any(|warning| warning
                .starts_with("reading in data row 2 (offset 1), sample \"w1\", skipped: `i_in` is empty")),
            "{:?}",
            output.warnings
        );
        // The same for an empty cell of the pair notation.
        let notation = with_contacts_notation(&complete);
        let mut cells: Vec<Option<String>> = notation
            .column("contacts")
            .unwrap()
            .str()
            .unwrap()
            .iter()
            .map(|cell| cell.map(str::to_owned))
            .collect();
        cells[2] = None;
        let mut with_empty_cell = notation.clone();
        with_empty_cell
            .with_column(Column::new("contacts".into(), cells))
            .unwrap();
        let output = skip(with_empty_cell).unwrap();
        assert_eq!(output.summary["skipped_readings"], json!(1));
        assert!(
            output.warnings.iter().any(|warning| warning
                .starts_with("reading in data row 3 (offset 2), sample \"w1\", skipped: `contacts` is empty")),
            "{:?}",
            output.warnings
        );
    }
}
