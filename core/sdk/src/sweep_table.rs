//! Field sweeps as plugin input tables: the `sweep` role's declaration and its conversion
//! into [`SweepPoint`]s, shared by the plugins that analyse sweeps (spectrum,
//! magnetoresistance). Pure table glue over [`crate::sdk`]; no I/O.
//!
//! # Sweeps by temperature
//!
//! A table may hold one sample's sweeps at several temperatures. Its rows are sorted by
//! temperature, and a new sweep starts wherever two consecutive temperatures are further
//! apart than the larger of `temperature_tolerance_K` (default
//! [`DEFAULT_TEMPERATURE_TOLERANCE_K`], 0.05 K) and `temperature_relative_tolerance` times the
//! lower of the two (default [`DEFAULT_TEMPERATURE_RELATIVE_TOLERANCE`], 0.5 %). A gap, not
//! a spread around the first reading: a stage that drifts slowly during a sweep logs
//! temperatures close to each other, however far the drift goes in total, while distinct
//! setpoints leave a gap between their readings. With the defaults 0.3, 0.4, ... 1.5 K stay
//! apart (gaps of 0.1 K), 2 K and 3 K stay apart, and a sweep whose stage drifts by tens of
//! mK, or by 1 % of T over a few dozen readings at room temperature, stays one sweep. A
//! sweep whose temperatures span more than ten times the gap allowed at its lowest
//! temperature is reported in a warning naming both parameters: it may be several setpoints
//! chained by readings in between.

use crate::abi::{ColumnSpec, ColumnType, InputRole};
use crate::sdk::{self, AnalysisError};
use mobilis_physics::sweep::{RepeatSummary, ResistivityUncertainty, SweepPoint, SymmetrizeSettings};
// The grouping is physics (the figures use it without tables); it is named here too because
// it is what the `sweep` role's temperature parameters set.
pub use mobilis_physics::sweep::{
    TemperatureGrouping, DEFAULT_TEMPERATURE_RELATIVE_TOLERANCE, DEFAULT_TEMPERATURE_TOLERANCE_K,
};
use polars::prelude::DataFrame;
use serde::Deserialize;
use serde_json::{json, Map, Value};

/// A sweep spanning more than this many allowed gaps is reported: it may be chained.
const CHAINED_SPAN_GAPS: f64 = 10.0;

/// Refuses a grouping whose tolerances are negative or not finite.
fn validate_grouping(grouping: &TemperatureGrouping) -> Result<(), AnalysisError> {
    for (name, value) in [
        ("temperature_tolerance_K", grouping.tolerance_k),
        ("temperature_relative_tolerance", grouping.relative_tolerance),
    ] {
        if !(value.is_finite() && value >= 0.0) {
            return Err(invalid(format!("{name} is {value}; give a finite value of 0 or more")));
        }
    }
    Ok(())
}

fn invalid(message: impl Into<String>) -> AnalysisError {
    AnalysisError::InvalidInput(message.into())
}

/// The `sweep` role. `several_temperatures` declares the analyses that take one sample's
/// sweeps at several temperatures in one call (Kohler, oscillations).
pub fn sweep_role(several_temperatures: bool) -> InputRole {
    use ColumnType::*;
    let description = if several_temperatures {
        "field sweeps of one sample at several temperatures (group_by sample for several samples); both field signs, or one (flagged single_field_sign)"
    } else {
        "a field sweep of one sample at one temperature (group_by sample and temperature_K for several); both field signs, or one (flagged single_field_sign)"
    };
    let temperature = ColumnSpec::new("temperature_K", F64, Some("K"), "temperature of the sweep");
    InputRole {
        role: "sweep".into(),
        required: true,
        description: description.into(),
        columns: vec![
            ColumnSpec::new("field_T", F64, Some("T"), "magnetic field, signed"),
            ColumnSpec::new("rho_xx_ohm_sq", F64, Some("ohm_sq"), "longitudinal sheet resistivity"),
            ColumnSpec::new(
                "rho_xy_ohm",
                F64,
                Some("ohm"),
                "transverse sheet resistivity, positive for holes at positive field",
            ),
            ColumnSpec::new(
                "rho_xx_ohm_sq_unc",
                F64,
                Some("ohm_sq"),
                "standard uncertainty; weights fits",
            )
            .optional(),
            ColumnSpec::new("rho_xy_ohm_unc", F64, Some("ohm"), "standard uncertainty").optional(),
            if several_temperatures {
                temperature
            } else {
                temperature.optional()
            },
            ColumnSpec::new("sample", Str, None, "sample name (one per call)").optional(),
        ],
    }
}

/// How a table's rows are grouped into sweeps by temperature (flatten into an analysis's
/// parameters; [`SweepParams`] carries it). The defaults are the physics'.
#[derive(Debug, Clone, Deserialize, schemars::JsonSchema)]
pub struct TemperatureGroupingParams {
    /// sorted temperatures further apart than this (and than temperature_relative_tolerance
    /// x T) start a new sweep, K
    #[serde(rename = "temperature_tolerance_K", default = "default_temperature_tolerance")]
    #[schemars(range(min = 0))]
    pub temperature_tolerance_k: f64,
    /// the same gap relative to the temperature
    #[serde(default = "default_relative_tolerance")]
    #[schemars(range(min = 0, max = 1))]
    pub temperature_relative_tolerance: f64,
}

fn default_temperature_tolerance() -> f64 {
    DEFAULT_TEMPERATURE_TOLERANCE_K
}

fn default_relative_tolerance() -> f64 {
    DEFAULT_TEMPERATURE_RELATIVE_TOLERANCE
}

impl Default for TemperatureGroupingParams {
    fn default() -> Self {
        Self {
            temperature_tolerance_k: default_temperature_tolerance(),
            temperature_relative_tolerance: default_relative_tolerance(),
        }
    }
}

impl TemperatureGroupingParams {
    /// The temperature grouping of these parameters.
    pub fn grouping(&self) -> TemperatureGrouping {
        TemperatureGrouping {
            tolerance_k: self.temperature_tolerance_k,
            relative_tolerance: self.temperature_relative_tolerance,
        }
    }
}

/// The symmetrization parameters every sweep analysis takes (flatten into an analysis's
/// parameters). The defaults are those of [`SymmetrizeSettings`], so they are stated once.
#[derive(Debug, Clone, Deserialize, schemars::JsonSchema)]
pub struct SweepParams {
    /// |B| at or below this is zero field, T; raise it above a magnet's remanence (a few mT)
    /// when the readings at its nominal zero read a field
    #[serde(rename = "zero_field_tolerance_T", default = "default_zero_field_tolerance")]
    #[schemars(range(min = 0))]
    pub zero_field_tolerance_t: f64,
    /// readings within this of the lowest |B| of their group are averaged into one field, T
    /// (groups are anchored, so a densely logged ramp keeps its field range); the point's
    /// uncertainty is the larger of the propagated one and the readings' scatter, and readings
    /// that disagree far beyond their uncertainties are warned about
    #[serde(rename = "field_resolution_T", default = "default_field_resolution")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub field_resolution_t: f64,
    #[serde(flatten)]
    pub temperatures: TemperatureGroupingParams,
}

fn default_zero_field_tolerance() -> f64 {
    SymmetrizeSettings::default().zero_field_tolerance_t
}

fn default_field_resolution() -> f64 {
    SymmetrizeSettings::default().field_resolution_t
}

impl Default for SweepParams {
    fn default() -> Self {
        Self {
            zero_field_tolerance_t: default_zero_field_tolerance(),
            field_resolution_t: default_field_resolution(),
            temperatures: TemperatureGroupingParams::default(),
        }
    }
}

impl SweepParams {
    pub fn settings(&self) -> SymmetrizeSettings {
        SymmetrizeSettings {
            zero_field_tolerance_t: self.zero_field_tolerance_t,
            field_resolution_t: self.field_resolution_t,
            ..SymmetrizeSettings::default()
        }
    }

    /// The temperature grouping of these parameters.
    pub fn grouping(&self) -> TemperatureGrouping {
        self.temperatures.grouping()
    }
}

/// The one warning of an analysis of several sweeps whose sweeps at `temperatures_k` had
/// one field sign each (instead of one warning per sweep); `None` when there are none.
pub fn single_field_sign_series_warning(temperatures_k: &[f64]) -> Option<String> {
    if temperatures_k.is_empty() {
        return None;
    }
    // Four significant digits, as the thermometer reads: a logged 0.30000906977534253 K is
    // shown as 0.3000 K.
    let list: Vec<String> = temperatures_k
        .iter()
        .map(|t| mobilis_physics::units::format_number(*t))
        .collect();
    Some(format!(
        "single_field_sign: the sweeps at {} K have one field sign only, so rho_xx was taken as even in B as measured, not symmetrized: a Hall voltage picked up by misaligned longitudinal contacts (odd in B) stays in it; measure both field signs to remove it",
        list.join(", ")
    ))
}

/// The summary keys that count the points of a symmetrized sweep that merge several
/// readings (repeated sweeps, or readings within `field_resolution_T` of each other), summed
/// over a series' sweeps: every analysis that symmetrizes sweeps declares them, and
/// [`repeat_summary`] gives their values.
pub fn repeat_summary_keys() -> [ColumnSpec; 2] {
    [
        ColumnSpec::new(
            "merged_points",
            ColumnType::I64,
            None,
            "symmetrized points that merge two or more readings (repeated sweeps, or readings within field_resolution_T of each other)",
        ),
        ColumnSpec::new(
            "widened_points",
            ColumnType::I64,
            None,
            "merged points whose uncertainty was widened to their readings' scatter, the readings disagreeing beyond their stated uncertainties",
        ),
    ]
}

/// The values of [`repeat_summary_keys`] for the symmetrized sweeps of a run.
pub fn repeat_summary<'a>(repeats: impl IntoIterator<Item = &'a RepeatSummary>) -> Map<String, Value> {
    let (merged, widened) = repeats
        .into_iter()
        .fold((0usize, 0usize), |(merged, widened), repeats| {
            (merged + repeats.merged_points, widened + repeats.widened_points)
        });
    let mut entries = Map::new();
    entries.insert("merged_points".into(), json!(merged));
    entries.insert("widened_points".into(), json!(widened));
    entries
}

/// One sweep of a table.
#[derive(Debug, Clone)]
pub struct SweepTable {
    /// The sample, when the table names one.
    pub sample: Option<String>,
    /// The mean temperature, when the table has one, K.
    pub temperature_k: Option<f64>,
    /// The lowest and highest temperature of its rows, K.
    pub temperature_range_k: Option<(f64, f64)>,
    pub points: Vec<SweepPoint>,
    /// What the grouping found questionable (a span that may chain several setpoints).
    pub warnings: Vec<String>,
}

impl SweepTable {
    /// `sample` and `temperature_K` for a summary.
    pub fn identity(&self) -> Map<String, Value> {
        let mut identity = Map::new();
        if let Some(sample) = &self.sample {
            identity.insert("sample".into(), json!(sample));
        }
        if let Some(temperature) = self.temperature_k {
            identity.insert("temperature_K".into(), json!(temperature));
        }
        identity
    }
}

fn single_sample(frame: &DataFrame) -> Result<Option<String>, AnalysisError> {
    if frame.column("sample").is_err() {
        return Ok(None);
    }
    let mut names: Vec<String> = sdk::string_column(frame, "sample")?.into_iter().flatten().collect();
    names.sort();
    names.dedup();
    if names.len() > 1 {
        return Err(invalid(format!(
            "the sweep table holds {} samples ({}); run with group_by sample",
            names.len(),
            names.join(", ")
        )));
    }
    Ok(names.pop())
}

/// The sweeps of one sample, one per temperature (rows of one table sorted by temperature
/// and split where consecutive temperatures leave a gap wider than `grouping` allows; see
/// the module documentation), in order of temperature.
pub fn sweeps_by_temperature(
    frame: &DataFrame,
    grouping: &TemperatureGrouping,
) -> Result<Vec<SweepTable>, AnalysisError> {
    validate_grouping(grouping)?;
    let sample = single_sample(frame)?;
    let fields = sdk::float_column(frame, "field_T")?;
    let rho_xx = sdk::float_column(frame, "rho_xx_ohm_sq")?;
    let rho_xy = sdk::float_column(frame, "rho_xy_ohm")?;
    let rho_xx_unc = sdk::optional_float_column(frame, "rho_xx_ohm_sq_unc")?;
    let rho_xy_unc = sdk::optional_float_column(frame, "rho_xy_ohm_unc")?;
    let temperatures = sdk::optional_float_column(frame, "temperature_K")?;
    let mut rows: Vec<(Option<f64>, SweepPoint)> = Vec::with_capacity(frame.height());
    for row in 0..frame.height() {
        let value = |v: Option<f64>, name: &str| {
            v.ok_or_else(|| {
                invalid(format!(
                    "{}: `{name}` is empty; every sweep point needs B, rho_xx and rho_xy",
                    sdk::data_row(row)
                ))
            })
        };
        let mut point = SweepPoint::new(
            value(fields[row], "field_T")?,
            value(rho_xx[row], "rho_xx_ohm_sq")?,
            value(rho_xy[row], "rho_xy_ohm")?,
        );
        if let (Some(xx), Some(xy)) = (rho_xx_unc[row], rho_xy_unc[row]) {
            point = point.with_uncertainty(ResistivityUncertainty::independent(xx, xy));
        }
        if let Some(t) = temperatures[row] {
            if !t.is_finite() {
                return Err(invalid(format!(
                    "{}: temperature_K is {t}; give a finite temperature or leave the cell empty",
                    sdk::data_row(row)
                )));
            }
        }
        rows.push((temperatures[row], point));
    }
    // Stable sort by temperature keeps each sweep's own point order; rows without a
    // temperature sort last and join the last sweep.
    rows.sort_by(|a, b| a.0.unwrap_or(f64::INFINITY).total_cmp(&b.0.unwrap_or(f64::INFINITY)));
    let mut sweeps: Vec<SweepTable> = Vec::new();
    let mut previous: Option<f64> = None;
    for (temperature, point) in rows {
        let starts_new = match (sweeps.last(), temperature, previous) {
            (None, _, _) => true,
            (Some(_), Some(t), Some(before)) => t - before > grouping.allowed_gap_k(before),
            _ => false,
        };
        if starts_new {
            sweeps.push(SweepTable {
                sample: sample.clone(),
                temperature_k: None,
                temperature_range_k: None,
                points: Vec::new(),
                warnings: Vec::new(),
            });
        }
        let sweep = sweeps.last_mut().expect("a sweep exists");
        sweep.points.push(point);
        if let Some(t) = temperature {
            previous = Some(t);
            let count = sweep.points.len() as f64;
            sweep.temperature_k = Some(sweep.temperature_k.map_or(t, |mean| mean + (t - mean) / count));
            sweep.temperature_range_k = Some(sweep.temperature_range_k.map_or((t, t), |(low, _)| (low, t)));
        }
    }
    if sweeps.is_empty() {
        return Err(invalid("the sweep table is empty"));
    }
    // Once per table: a field beyond any magnet is a unit error of the whole column.
    let largest_field_t = sweeps
        .iter()
        .flat_map(|sweep| &sweep.points)
        .fold(0.0_f64, |largest, point| largest.max(point.field_t.abs()));
    sweeps[0]
        .warnings
        .extend(mobilis_physics::units::implausible_field_warning(
            "field_T",
            largest_field_t,
        ));
    for sweep in &mut sweeps {
        if let (Some((low, high)), Some(mean)) = (sweep.temperature_range_k, sweep.temperature_k) {
            if high - low > CHAINED_SPAN_GAPS * grouping.allowed_gap_k(low) && high > low {
                sweep.warnings.push(format!(
                    "the sweep at {mean:.4} K holds temperatures from {low:.4} K to {high:.4} K, each within the allowed gap of the next ({}); if these are several setpoints, lower temperature_tolerance_K or temperature_relative_tolerance so that they are told apart",
                    grouping.describe()
                ));
            }
        }
    }
    Ok(sweeps)
}

/// A `group_tolerance` for the daemon's grouping that splits the table where the sweeps
/// split: half the narrowest gap between two sweeps, which leaves the most room for a
/// logged temperature's jitter; the widest gap a sweep may hold when that half is smaller
/// and the gap allows it (a relative tolerance allows wider gaps in a warm sweep).
fn separating_tolerance_k(sweeps: &[SweepTable], grouping: &TemperatureGrouping) -> f64 {
    let spans: Vec<(f64, f64)> = sweeps.iter().filter_map(|sweep| sweep.temperature_range_k).collect();
    let widest_within = spans
        .iter()
        .map(|&(_, high)| grouping.allowed_gap_k(high))
        .fold(0.0, f64::max);
    let narrowest_between = spans
        .windows(2)
        .map(|pair| pair[1].0 - pair[0].1)
        .fold(f64::INFINITY, f64::min);
    let half = narrowest_between / 2.0;
    if half < widest_within && widest_within < narrowest_between {
        widest_within
    } else {
        half
    }
}

/// The single sweep of a table; refuses a table holding several samples or temperatures.
pub fn single_sweep(frame: &DataFrame, grouping: &TemperatureGrouping) -> Result<SweepTable, AnalysisError> {
    let mut sweeps = sweeps_by_temperature(frame, grouping)?;
    if sweeps.len() > 1 {
        let temperatures: Vec<String> = sweeps
            .iter()
            .filter_map(|s| s.temperature_k)
            .map(|t| format!("{t:.4} K"))
            .collect();
        return Err(invalid(format!(
            "the sweep table holds sweeps at {} (a gap between sorted temperatures wider than {} starts a new sweep); run with group_by [\"sample\", \"temperature_K\"] and group_tolerance {{\"temperature_K\": {}}} so that each call sees one sweep however its logged temperature jitters (without group_tolerance each distinct value is a group of its own), or raise temperature_tolerance_K if they are one sweep",
            temperatures.join(", "),
            grouping.describe(),
            // Two significant digits, written as JSON would take it back.
            format!("{:.1e}", separating_tolerance_k(&sweeps, grouping))
                .parse::<f64>()
                .expect("a formatted number parses")
        )));
    }
    Ok(sweeps.pop().expect("one sweep"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use polars::prelude::*;

    #[test]
    fn repeat_counts_add_up_over_a_series_and_are_declared() {
        let sweep = |merged_points, widened_points| RepeatSummary {
            merged_points,
            widened_points,
            ..Default::default()
        };
        let series = [sweep(73, 73), sweep(10, 0), sweep(0, 0)];
        let summary = repeat_summary(&series);
        assert_eq!(summary["merged_points"], json!(83));
        assert_eq!(summary["widened_points"], json!(73));
        assert_eq!(repeat_summary([]), repeat_summary([&sweep(0, 0)]));
        let declared: Vec<String> = repeat_summary_keys().iter().map(|key| key.name.clone()).collect();
        assert_eq!(declared, summary.keys().cloned().collect::<Vec<_>>());
    }

    #[test]
    fn a_table_splits_into_sweeps_by_temperature() {
        let frame = df!(
            "sample" => ["s"; 6],
            "temperature_K" => [4.2, 2.0, 4.21, 2.01, 2.0, 4.2],
            "field_T" => [1.0, -1.0, -1.0, 1.0, 0.0, 0.0],
            "rho_xx_ohm_sq" => [10.0, 11.0, 12.0, 13.0, 14.0, 15.0],
            "rho_xy_ohm" => [1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
        )
        .unwrap();
        let sweeps = sweeps_by_temperature(&frame, &TemperatureGrouping::default()).unwrap();
        assert_eq!(sweeps.len(), 2);
        assert_eq!(sweeps[0].points.len(), 3);
        assert!((sweeps[0].temperature_k.unwrap() - 2.00333).abs() < 1e-4);
        assert_eq!(sweeps[0].sample.as_deref(), Some("s"));
        // Point order within a sweep is kept.
        assert_eq!(sweeps[0].points[0].field_t, -1.0);
        // The advice gives a group tolerance that splits the table where the sweeps split:
        // half the 2.19 K between them.
        let advice = single_sweep(&frame, &TemperatureGrouping::default())
            .unwrap_err()
            .to_string();
        assert!(
            advice.contains(r#"group_by ["sample", "temperature_K"] and group_tolerance {"temperature_K": 1.1}"#),
            "{advice}"
        );
    }

    /// A field beyond any laboratory magnet (about 100 T; common practice, from memory) is
    /// reported once per table, with the import that converts it.
    #[test]
    fn a_field_beyond_any_magnet_is_reported_once() {
        let frame = df!(
            "temperature_K" => [2.0, 2.0, 10.0, 10.0],
            "field_T" => [5000.0, -5000.0, 5000.0, -5000.0],
            "rho_xx_ohm_sq" => [10.0, 10.0, 12.0, 12.0],
            "rho_xy_ohm" => [1.0, -1.0, 1.0, -1.0],
        )
        .unwrap();
        let sweeps = sweeps_by_temperature(&frame, &TemperatureGrouping::default()).unwrap();
        let warnings: Vec<&String> = sweeps.iter().flat_map(|sweep| &sweep.warnings).collect();
        assert_eq!(warnings.len(), 1, "{warnings:?}");
        assert!(warnings[0].starts_with("field_T reaches 5000 T"), "{}", warnings[0]);
        let in_tesla = df!(
            "temperature_K" => [2.0, 2.0],
            "field_T" => [0.5, -0.5],
            "rho_xx_ohm_sq" => [10.0, 10.0],
            "rho_xy_ohm" => [1.0, -1.0],
        )
        .unwrap();
        let sweeps = sweeps_by_temperature(&in_tesla, &TemperatureGrouping::default()).unwrap();
        assert!(sweeps.iter().all(|sweep| sweep.warnings.is_empty()));
    }

    #[test]
    fn several_samples_and_empty_cells_are_refused() {
        let frame = df!("sample" => ["a", "b"], "field_T" => [1.0, -1.0], "rho_xx_ohm_sq" => [1.0, 1.0], "rho_xy_ohm" => [0.1, -0.1]).unwrap();
        assert!(single_sweep(&frame, &TemperatureGrouping::default())
            .unwrap_err()
            .to_string()
            .contains("2 samples"));
        let frame =
            df!("field_T" => [Some(1.0), None], "rho_xx_ohm_sq" => [1.0, 1.0], "rho_xy_ohm" => [0.1, -0.1]).unwrap();
        assert!(single_sweep(&frame, &TemperatureGrouping::default())
            .unwrap_err()
            .to_string()
            .contains("data row 2 (offset 1): `field_T` is empty"));
    }

    /// A table of `per_sweep` rows at each temperature, each row's temperature offset by
    /// `drift(k)` (the stage's drift during the sweep).
    fn series(temperatures: &[f64], per_sweep: usize, drift: impl Fn(usize) -> f64) -> DataFrame {
        let (mut t, mut b, mut xx, mut xy) = (vec![], vec![], vec![], vec![]);
        for &temperature in temperatures {
            for k in 0..per_sweep {
                t.push(temperature + drift(k));
                b.push(k as f64 - (per_sweep / 2) as f64);
                xx.push(100.0);
                xy.push(1.0);
            }
        }
        df!("temperature_K" => t, "field_T" => b, "rho_xx_ohm_sq" => xx, "rho_xy_ohm" => xy).unwrap()
    }

    fn means(sweeps: &[SweepTable]) -> Vec<f64> {
        sweeps.iter().map(|s| s.temperature_k.unwrap()).collect()
    }

    // The default grouping keeps distinct setpoints apart (a sub-kelvin series in 0.1 K
    // steps, 2 K and 3 K) and keeps together one sweep whose stage drifts by tens of mK, or
    // by 1 % of T at room temperature over 25 readings.
    #[test]
    fn grouping_never_merges_distinct_setpoints_and_keeps_drifting_sweeps_whole() {
        let grouping = TemperatureGrouping::default();
        let sub_kelvin: Vec<f64> = (3..=15).map(|k| 0.1 * k as f64).collect();
        let sweeps = sweeps_by_temperature(&series(&sub_kelvin, 21, |_| 0.0), &grouping).unwrap();
        assert_eq!(sweeps.len(), 13);
        for (mean, expected) in means(&sweeps).iter().zip(&sub_kelvin) {
            assert!((mean - expected).abs() < 1e-12, "{mean} vs {expected}");
        }
        let demo = [2.0, 3.0, 4.5, 6.0, 8.0, 10.0];
        let sweeps = sweeps_by_temperature(&series(&demo, 11, |_| 0.0), &grouping).unwrap();
        assert_eq!(means(&sweeps), demo.to_vec());
        // 30 mK of drift along each sweep at 0.3 .. 1.5 K (a ramp of 21 readings).
        let sweeps = sweeps_by_temperature(&series(&sub_kelvin, 21, |k| 0.0015 * k as f64), &grouping).unwrap();
        assert_eq!(sweeps.len(), 13);
        assert!(sweeps.iter().all(|s| s.points.len() == 21 && s.warnings.is_empty()));
        let (low, high) = sweeps[0].temperature_range_k.unwrap();
        assert!((high - low - 0.03).abs() < 1e-12);
        // 1 % of 300 K (3 K) over 25 readings: gaps of 0.125 K against the 1.5 K allowed.
        let sweeps = sweeps_by_temperature(&series(&[300.0], 25, |k| 0.125 * k as f64), &grouping).unwrap();
        assert_eq!(sweeps.len(), 1);
        assert!(sweeps[0].warnings.is_empty());
    }

    // The tolerance is a parameter: raised, it merges 2 K and 3 K; zero keeps every distinct
    // temperature apart; bad values are refused naming the parameter.
    #[test]
    fn grouping_tolerance_is_a_parameter_and_bad_values_are_refused() {
        let frame = series(&[2.0, 3.0], 5, |_| 0.0);
        let params: SweepParams = serde_json::from_value(json!({"temperature_tolerance_K": 1.5})).unwrap();
        assert_eq!(sweeps_by_temperature(&frame, &params.grouping()).unwrap().len(), 1);
        let exact = TemperatureGrouping {
            tolerance_k: 0.0,
            relative_tolerance: 0.0,
        };
        let drifting = series(&[2.0], 4, |k| 1e-3 * k as f64);
        assert_eq!(sweeps_by_temperature(&drifting, &exact).unwrap().len(), 4);
        for (tolerance_k, relative_tolerance, name) in [
            (-0.1, 0.0, "temperature_tolerance_K"),
            (f64::NAN, 0.0, "temperature_tolerance_K"),
            (0.05, -1.0, "temperature_relative_tolerance"),
        ] {
            let grouping = TemperatureGrouping {
                tolerance_k,
                relative_tolerance,
            };
            let message = sweeps_by_temperature(&frame, &grouping).unwrap_err().to_string();
            assert!(message.contains(name), "{message}");
            assert!(!message.ends_with('.'));
        }
        let message = single_sweep(&frame, &TemperatureGrouping::default())
            .unwrap_err()
            .to_string();
        assert!(message.contains("temperature_tolerance_K"), "{message}");
        let bad = df!("temperature_K" => [2.0, f64::NAN], "field_T" => [1.0, -1.0], "rho_xx_ohm_sq" => [1.0, 1.0], "rho_xy_ohm" => [0.1, -0.1]).unwrap();
        let message = single_sweep(&bad, &TemperatureGrouping::default())
            .unwrap_err()
            .to_string();
        assert!(
            message.contains("data row 2 (offset 1): temperature_K is NaN"),
            "{message}"
        );
    }

    // Setpoints chained by readings in between (a temperature ramp logged as one table) are
    // one group by the gap rule; the warning names both parameters.
    #[test]
    fn grouping_warns_when_a_sweep_spans_many_allowed_gaps() {
        let ramp = series(&[2.0], 41, |k| 0.025 * k as f64);
        let sweeps = sweeps_by_temperature(&ramp, &TemperatureGrouping::default()).unwrap();
        assert_eq!(sweeps.len(), 1);
        let warning = sweeps[0].warnings.join(" ");
        assert!(
            warning.contains("temperature_tolerance_K") && warning.contains("temperature_relative_tolerance"),
            "{warning}"
        );
    }
}
