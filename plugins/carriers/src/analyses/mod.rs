//! Table glue of the carriers analyses: reading the `hall` role and the summary tables of
//! earlier fits, parsing the shared parameters (material, carrier type, Hall factor), and the
//! small helpers that write output tables and summaries.

pub mod arrhenius_fit;
pub mod freeze_out_fit;
pub mod mobility_scattering;
pub mod purity_summary;

use crate::freeze_out::{CarrierType, DensityPoint, HallFactor};
use crate::materials::{Material, MaterialOverrides, PRESET_NAMES};
use mobilis_sdk::abi::{ColumnSpec, ColumnType};
use mobilis_sdk::sdk::{self, AnalysisError};
use polars::prelude::*;
use serde::Deserialize;
use serde_json::{json, Value};

pub(crate) fn invalid(message: impl Into<String>) -> AnalysisError {
    AnalysisError::InvalidInput(message.into())
}

pub(crate) fn column(name: &str, dtype: ColumnType, unit: Option<&str>, description: &str) -> ColumnSpec {
    ColumnSpec::new(name, dtype, unit, description)
}

/// The JSON Schema of the material parameters shared by the carriers analyses.
pub(crate) fn material_schema_properties() -> serde_json::Map<String, Value> {
    let positive = |description: &str| json!({"type": "number", "exclusiveMinimum": 0, "description": description});
    let mut properties = serde_json::Map::new();
    properties.insert(
        "material".into(),
        json!({"type": "string", "enum": PRESET_NAMES, "default": "Si", "description": "material preset (band parameters, permittivity, masses); every value can be overridden"}),
    );
    properties.insert(
        "material_overrides".into(),
        json!({
            "type": "object",
            "additionalProperties": false,
            "description": "replace preset values (SI units)",
            "properties": {
                "conduction_dos_300K_m3": positive("conduction-band effective density of states at 300 K, m^-3"),
                "valence_dos_300K_m3": positive("valence-band effective density of states at 300 K, m^-3"),
                "band_gap_0K_eV": positive("Varshni Eg(0), eV"),
                "varshni_alpha_eV_per_K": {"type": "number", "minimum": 0, "description": "Varshni alpha, eV/K"},
                "varshni_beta_K": {"type": "number", "minimum": 0, "description": "Varshni beta, K"},
                "relative_permittivity": positive("static relative permittivity"),
                "electron_conductivity_mass_ratio": positive("electron conductivity mass / m0"),
                "hole_conductivity_mass_ratio": positive("hole conductivity mass / m0")
            }
        }),
    );
    properties.insert(
        "carrier_type".into(),
        json!({"type": ["string", "null"], "enum": ["n", "p", null], "default": null, "description": "force n or p; default: from the data's carrier_type column"}),
    );
    properties.insert(
        "hall_factor".into(),
        json!({"type": "number", "exclusiveMinimum": 0, "description": "apply a constant Hall factor r_H before fitting (n = r_H n_H, mu = mu_H / r_H); default 1: use the values as given (hall.reduce already applies the sample sheet's factor)"}),
    );
    properties.insert(
        "hall_factor_scattering_exponent".into(),
        json!({"type": "number", "description": "instead of hall_factor: r_H of a relaxation time tau ~ E^s (s = -0.5 acoustic phonons, 1.5 ionized impurities; Putley 1960)"}),
    );
    properties.insert(
        "temperature_min_K".into(),
        json!({"type": "number", "exclusiveMinimum": 0, "description": "use only points at or above this temperature"}),
    );
    properties.insert(
        "temperature_max_K".into(),
        json!({"type": "number", "exclusiveMinimum": 0, "description": "use only points at or below this temperature"}),
    );
    properties
}

/// `material_overrides`: values replacing the preset's.
#[derive(Debug, Default, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub(crate) struct MaterialOverrideParams {
    #[serde(rename = "conduction_dos_300K_m3")]
    conduction_dos_300k_m3: Option<f64>,
    #[serde(rename = "valence_dos_300K_m3")]
    valence_dos_300k_m3: Option<f64>,
    #[serde(rename = "band_gap_0K_eV")]
    band_gap_0k_ev: Option<f64>,
    #[serde(rename = "varshni_alpha_eV_per_K")]
    varshni_alpha_ev_per_k: Option<f64>,
    #[serde(rename = "varshni_beta_K")]
    varshni_beta_k: Option<f64>,
    relative_permittivity: Option<f64>,
    electron_conductivity_mass_ratio: Option<f64>,
    hole_conductivity_mass_ratio: Option<f64>,
}

/// Resolves a preset name and overrides into a material.
pub(crate) fn resolve_material(name: &str, overrides: &MaterialOverrideParams) -> Result<Material, AnalysisError> {
    let preset = Material::preset(name).map_err(|e| invalid(e.to_string()))?;
    preset
        .with_overrides(&MaterialOverrides {
            conduction_dos_300k_m3: overrides.conduction_dos_300k_m3,
            valence_dos_300k_m3: overrides.valence_dos_300k_m3,
            band_gap_0k_ev: overrides.band_gap_0k_ev,
            varshni_alpha_ev_per_k: overrides.varshni_alpha_ev_per_k,
            varshni_beta_k: overrides.varshni_beta_k,
            relative_permittivity: overrides.relative_permittivity,
            electron_conductivity_mass_ratio: overrides.electron_conductivity_mass_ratio,
            hole_conductivity_mass_ratio: overrides.hole_conductivity_mass_ratio,
            ..MaterialOverrides::default()
        })
        .map_err(|e| invalid(e.to_string()))
}

pub(crate) fn parse_carrier_type(text: Option<&str>) -> Result<Option<CarrierType>, AnalysisError> {
    match text {
        None => Ok(None),
        Some(t) => CarrierType::parse(t)
            .map(Some)
            .ok_or_else(|| invalid(format!("carrier_type `{t}` is unknown; use n or p"))),
    }
}

pub(crate) fn hall_factor(constant: Option<f64>, exponent: Option<f64>) -> Result<HallFactor, AnalysisError> {
    match (constant, exponent) {
        (Some(_), Some(_)) => Err(invalid(
            "give either hall_factor or hall_factor_scattering_exponent, not both",
        )),
        (Some(value), None) => Ok(HallFactor::Constant(value)),
        (None, Some(exponent)) => Ok(HallFactor::ScatteringExponent(exponent)),
        (None, None) => Ok(HallFactor::Unity),
    }
}

pub(crate) fn temperature_range(min: Option<f64>, max: Option<f64>) -> Result<Option<(f64, f64)>, AnalysisError> {
    match (min, max) {
        (None, None) => Ok(None),
        (min, max) => {
            let range = (min.unwrap_or(0.0), max.unwrap_or(f64::INFINITY));
            if range.0 > range.1 {
                return Err(invalid(format!(
                    "temperature_min_K {} is above temperature_max_K {}; give min <= max",
                    range.0, range.1
                )));
            }
            Ok(Some(range))
        }
    }
}

/// An optional float column (absent: all `None`).
pub(crate) fn optional_floats(frame: &DataFrame, name: &str) -> Result<Vec<Option<f64>>, AnalysisError> {
    if frame.column(name).is_ok() {
        sdk::float_column(frame, name)
    } else {
        Ok(vec![None; frame.height()])
    }
}

/// An optional text column (absent: all `None`).
pub(crate) fn optional_strings(frame: &DataFrame, name: &str) -> Result<Vec<Option<String>>, AnalysisError> {
    if frame.column(name).is_ok() {
        sdk::string_column(frame, name)
    } else {
        Ok(vec![None; frame.height()])
    }
}

/// The density points of a `hall` table. Rows without a density (a temperature where the
/// Hall reduction had no field data) are skipped with a warning, not refused.
///
/// The budget: `density_m3_unc_stat` weights the fit and `density_m3_unc_sys` is the
/// common scale; an older table with only `density_m3_unc` has it taken as statistical,
/// with a warning that no calibration budget was given. `temperature_K_unc` is the
/// temperature's standard uncertainty and `hall_factor` the factor already applied.
pub(crate) fn density_points(hall: &DataFrame, warnings: &mut Vec<String>) -> Result<Vec<DensityPoint>, AnalysisError> {
    let temperatures = sdk::float_column(hall, "temperature_K")?;
    let densities = sdk::float_column(hall, "density_m3")?;
    let has_budget = hall.column("density_m3_unc_stat").is_ok();
    let statistical = if has_budget {
        optional_floats(hall, "density_m3_unc_stat")?
    } else {
        optional_floats(hall, "density_m3_unc")?
    };
    let systematic = optional_floats(hall, "density_m3_unc_sys")?;
    let temperature_unc = optional_floats(hall, "temperature_K_unc")?;
    let applied_hall_factor = optional_floats(hall, "hall_factor")?;
    let types = optional_strings(hall, "carrier_type")?;
    let mut points = Vec::with_capacity(hall.height());
    let mut skipped = 0;
    for row in 0..hall.height() {
        let (Some(temperature_k), Some(density_m3)) = (temperatures[row], densities[row]) else {
            skipped += 1;
            continue;
        };
        let carrier_type = match types[row].as_deref() {
            None | Some("") => None,
            Some(text) => Some(
                CarrierType::parse(text)
                    .ok_or_else(|| invalid(format!("row {row}: carrier_type `{text}` is unknown; use n or p")))?,
            ),
        };
        points.push(DensityPoint {
            temperature_k,
            density_m3,
            density_unc_m3: statistical[row],
            density_unc_sys_m3: systematic[row],
            temperature_unc_k: temperature_unc[row],
            applied_hall_factor: applied_hall_factor[row],
            carrier_type,
        });
    }
    if skipped > 0 {
        warnings.push(format!("{skipped} rows without a temperature or density were skipped"));
    }
    if !has_budget && points.iter().any(|point| point.density_unc_m3.is_some()) {
        warnings.push(
            "the table has density_m3_unc but no density_m3_unc_stat: density_m3_unc was taken as statistical (it weights the fit) and no calibration budget was given; reduce with a current hall.reduce, or state the common scale (thickness, current, field) with density_scale_relative_uncertainty where the analysis takes it (carriers.freeze_out_fit; a slope does not depend on it)"
                .into(),
        );
    }
    Ok(points)
}

/// Inserts `name` and `name_unc` into a summary.
pub(crate) fn insert_estimate(
    summary: &mut serde_json::Map<String, Value>,
    name: &str,
    value: f64,
    uncertainty: Option<f64>,
) {
    summary.insert(name.into(), json!(value));
    summary.insert(format!("{name}_unc"), json!(uncertainty));
}

/// A nullable float column.
pub(crate) fn float_series(name: &str, values: Vec<Option<f64>>) -> Column {
    Column::new(PlSmallStr::from_str(name), values)
}

pub(crate) fn frame(height: usize, columns: Vec<Column>) -> Result<DataFrame, AnalysisError> {
    DataFrame::new(height, columns).map_err(|e| AnalysisError::Numerical(e.to_string()))
}
