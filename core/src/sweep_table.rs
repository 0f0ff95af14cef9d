//! Field sweeps as plugin input tables: the `sweep` role's declaration and its conversion
//! into [`SweepPoint`]s, shared by the plugins that analyse sweeps (spectrum,
//! magnetoresistance). Pure table glue over [`crate::sdk`]; no I/O.

use crate::abi::{ColumnSpec, ColumnType, InputRole};
use crate::sdk::{self, AnalysisError};
use crate::sweep::{ResistivityUncertainty, SweepPoint, SymmetrizeSettings};
use polars::prelude::DataFrame;
use serde::Deserialize;
use serde_json::{json, Map, Value};

/// Temperatures of one sweep stay within this of each other, K: a sweep is taken at one set
/// point, and a larger spread means two sweeps in one table.
pub const ONE_SWEEP_TEMPERATURE_SPREAD_K: f64 = 1.0;

fn invalid(message: impl Into<String>) -> AnalysisError {
    AnalysisError::InvalidInput(message.into())
}

/// The `sweep` role. `several_temperatures` declares the analyses that take one sample's
/// sweeps at several temperatures in one call (Kohler, oscillations).
pub fn sweep_role(several_temperatures: bool) -> InputRole {
    use ColumnType::*;
    let description = if several_temperatures {
        "field sweeps of one sample at several temperatures (group_by sample for several samples); both field signs"
    } else {
        "a field sweep of one sample at one temperature (group_by sample and temperature_K for several); both field signs"
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

/// JSON Schema properties of the symmetrization parameters every sweep analysis takes.
pub fn sweep_schema_properties() -> Map<String, Value> {
    let mut properties = Map::new();
    properties.insert(
        "zero_field_tolerance_T".into(),
        json!({"type": "number", "minimum": 0, "default": 1e-4, "description": "|B| at or below this is zero field"}),
    );
    properties.insert("field_resolution_T".into(), json!({"type": "number", "exclusiveMinimum": 0, "default": 1e-4, "description": "fields closer than this are one field when the two branches are merged"}));
    properties
}

/// The symmetrization parameters (flatten into an analysis's parameters).
#[derive(Debug, Default, Deserialize)]
pub struct SweepParams {
    #[serde(rename = "zero_field_tolerance_T", default)]
    pub zero_field_tolerance_t: Option<f64>,
    #[serde(rename = "field_resolution_T", default)]
    pub field_resolution_t: Option<f64>,
}

impl SweepParams {
    pub fn settings(&self) -> SymmetrizeSettings {
        let mut settings = SymmetrizeSettings::default();
        if let Some(tolerance) = self.zero_field_tolerance_t {
            settings.zero_field_tolerance_t = tolerance;
        }
        if let Some(resolution) = self.field_resolution_t {
            settings.field_resolution_t = resolution;
        }
        settings
    }
}

/// An optional float column (absent: all `None`).
pub fn optional_floats(frame: &DataFrame, name: &str) -> Result<Vec<Option<f64>>, AnalysisError> {
    if frame.column(name).is_ok() {
        sdk::float_column(frame, name)
    } else {
        Ok(vec![None; frame.height()])
    }
}

/// One sweep of a table.
#[derive(Debug, Clone)]
pub struct SweepTable {
    /// The sample, when the table names one.
    pub sample: Option<String>,
    /// The mean temperature, when the table has one, K.
    pub temperature_k: Option<f64>,
    pub points: Vec<SweepPoint>,
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

/// The sweeps of one sample, one per temperature (rows of one table sorted into sweeps by
/// their temperature, consecutive temperatures within [`ONE_SWEEP_TEMPERATURE_SPREAD_K`]
/// forming one sweep), in order of temperature.
pub fn sweeps_by_temperature(frame: &DataFrame) -> Result<Vec<SweepTable>, AnalysisError> {
    let sample = single_sample(frame)?;
    let fields = sdk::float_column(frame, "field_T")?;
    let rho_xx = sdk::float_column(frame, "rho_xx_ohm_sq")?;
    let rho_xy = sdk::float_column(frame, "rho_xy_ohm")?;
    let rho_xx_unc = optional_floats(frame, "rho_xx_ohm_sq_unc")?;
    let rho_xy_unc = optional_floats(frame, "rho_xy_ohm_unc")?;
    let temperatures = optional_floats(frame, "temperature_K")?;
    let mut rows: Vec<(Option<f64>, SweepPoint)> = Vec::with_capacity(frame.height());
    for row in 0..frame.height() {
        let value = |v: Option<f64>, name: &str| {
            v.ok_or_else(|| {
                invalid(format!(
                    "row {row}: `{name}` is empty; every sweep point needs B, rho_xx and rho_xy"
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
        rows.push((temperatures[row], point));
    }
    // Stable sort by temperature keeps each sweep's own point order.
    rows.sort_by(|a, b| a.0.unwrap_or(f64::NAN).total_cmp(&b.0.unwrap_or(f64::NAN)));
    let mut sweeps: Vec<SweepTable> = Vec::new();
    let mut first_temperature: Option<f64> = None;
    for (temperature, point) in rows {
        let starts_new = match (sweeps.last(), temperature, first_temperature) {
            (None, _, _) => true,
            (Some(_), Some(t), Some(first)) => t - first > ONE_SWEEP_TEMPERATURE_SPREAD_K,
            _ => false,
        };
        if starts_new {
            first_temperature = temperature;
            sweeps.push(SweepTable {
                sample: sample.clone(),
                temperature_k: None,
                points: Vec::new(),
            });
        }
        sweeps.last_mut().expect("a sweep exists").points.push(point);
        if let Some(t) = temperature {
            let sweep = sweeps.last_mut().expect("a sweep exists");
            let count = sweep.points.len() as f64;
            sweep.temperature_k = Some(sweep.temperature_k.map_or(t, |mean| mean + (t - mean) / count));
        }
    }
    if sweeps.is_empty() {
        return Err(invalid("the sweep table is empty"));
    }
    Ok(sweeps)
}

/// The single sweep of a table; refuses a table holding several samples or temperatures.
pub fn single_sweep(frame: &DataFrame) -> Result<SweepTable, AnalysisError> {
    let mut sweeps = sweeps_by_temperature(frame)?;
    if sweeps.len() > 1 {
        let temperatures: Vec<String> = sweeps
            .iter()
            .filter_map(|s| s.temperature_k)
            .map(|t| format!("{t:.4} K"))
            .collect();
        return Err(invalid(format!(
            "the sweep table holds sweeps at {}; run with group_by [\"sample\", \"temperature_K\"] so that each call sees one temperature",
            temperatures.join(", ")
        )));
    }
    Ok(sweeps.pop().expect("one sweep"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use polars::prelude::*;

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
        let sweeps = sweeps_by_temperature(&frame).unwrap();
        assert_eq!(sweeps.len(), 2);
        assert_eq!(sweeps[0].points.len(), 3);
        assert!((sweeps[0].temperature_k.unwrap() - 2.00333).abs() < 1e-4);
        assert_eq!(sweeps[0].sample.as_deref(), Some("s"));
        // Point order within a sweep is kept.
        assert_eq!(sweeps[0].points[0].field_t, -1.0);
        assert!(single_sweep(&frame).unwrap_err().to_string().contains("group_by"));
    }

    #[test]
    fn several_samples_and_empty_cells_are_refused() {
        let frame = df!("sample" => ["a", "b"], "field_T" => [1.0, -1.0], "rho_xx_ohm_sq" => [1.0, 1.0], "rho_xy_ohm" => [0.1, -0.1]).unwrap();
        assert!(single_sweep(&frame).unwrap_err().to_string().contains("2 samples"));
        let frame =
            df!("field_T" => [Some(1.0), None], "rho_xx_ohm_sq" => [1.0, 1.0], "rho_xy_ohm" => [0.1, -0.1]).unwrap();
        assert!(single_sweep(&frame).unwrap_err().to_string().contains("row 1"));
    }
}
