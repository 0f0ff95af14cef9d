//! Table glue of the carriers analyses: the parameter groups they share (material, carrier
//! type, Hall factor, temperature range, uncertainty budget, consistency tolerance), each a
//! typed struct flattened into the analyses' parameters, and reading the `hall` role.

pub mod arrhenius_fit;
pub mod freeze_out_fit;
pub mod mobility_scattering;
pub mod purity_summary;

#[cfg(test)]
mod params_tests;

use crate::carrier_type::CarrierType;
use crate::freeze_out::{DensityPoint, HallFactor};
use crate::materials::{Material, MaterialOverrides, MaterialPreset};
use crate::purity::ConsistencyTolerance;
use mobilis_numerics::fit::RELATIVE_UNCERTAINTY_FLOOR;
use mobilis_sdk::sdk::{self, invalid, AnalysisError, OutputBuilder};
use polars::prelude::*;
use schemars::JsonSchema;
use serde::Deserialize;

/// The material whose constants a fit uses: a preset, with any of its values replaced.
#[derive(Debug, Default, Deserialize, JsonSchema)]
pub struct MaterialParams {
    /// material preset (band parameters, permittivity, masses); every value can be overridden
    #[serde(default)]
    pub material: MaterialPreset,
    /// replace preset values (SI units)
    #[serde(default)]
    pub material_overrides: MaterialOverrideParams,
}

impl MaterialParams {
    /// The preset with the overrides applied; an override out of range names its field.
    pub(crate) fn resolve(&self) -> Result<Material, AnalysisError> {
        let given = &self.material_overrides;
        self.material
            .material()
            .with_overrides(&MaterialOverrides {
                conduction_dos_300k_m3: given.conduction_dos_300k_m3,
                valence_dos_300k_m3: given.valence_dos_300k_m3,
                band_gap_0k_ev: given.band_gap_0k_ev,
                varshni_alpha_ev_per_k: given.varshni_alpha_ev_per_k,
                varshni_beta_k: given.varshni_beta_k,
                relative_permittivity: given.relative_permittivity,
                electron_conductivity_mass_ratio: given.electron_conductivity_mass_ratio,
                hole_conductivity_mass_ratio: given.hole_conductivity_mass_ratio,
                ..MaterialOverrides::default()
            })
            .map_err(|e| invalid(e.to_string()))
    }
}

/// `material_overrides`: values replacing the preset's; each one not given keeps the preset's.
#[derive(Debug, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MaterialOverrideParams {
    /// conduction-band effective density of states at 300 K, m^-3
    #[serde(rename = "conduction_dos_300K_m3", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub conduction_dos_300k_m3: Option<f64>,
    /// valence-band effective density of states at 300 K, m^-3
    #[serde(rename = "valence_dos_300K_m3", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub valence_dos_300k_m3: Option<f64>,
    /// Varshni Eg(0), eV
    #[serde(rename = "band_gap_0K_eV", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub band_gap_0k_ev: Option<f64>,
    /// Varshni alpha, eV/K
    #[serde(rename = "varshni_alpha_eV_per_K", default)]
    #[schemars(range(min = 0))]
    pub varshni_alpha_ev_per_k: Option<f64>,
    /// Varshni beta, K
    #[serde(rename = "varshni_beta_K", default)]
    #[schemars(range(min = 0))]
    pub varshni_beta_k: Option<f64>,
    /// static relative permittivity
    #[serde(default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub relative_permittivity: Option<f64>,
    /// electron conductivity mass / m0
    #[serde(default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub electron_conductivity_mass_ratio: Option<f64>,
    /// hole conductivity mass / m0
    #[serde(default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub hole_conductivity_mass_ratio: Option<f64>,
}

/// The Hall factor of the density fits: each given one *replaces* the factor `hall.reduce`
/// applied (its `hall_factor` column), n = n_given r_H(T) / r_applied.
#[derive(Debug, Default, Deserialize, JsonSchema)]
pub struct DensityHallFactorParams {
    /// a constant Hall factor r_H replacing the one already applied to the densities (the
    /// hall_factor column of hall.reduce, 1 without it): n = n_given r_H / r_applied; default:
    /// the densities as given
    #[serde(default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub hall_factor: Option<f64>,
    /// instead of hall_factor: r_H of a relaxation time tau ~ E^s (s = -0.5 acoustic phonons,
    /// 1.5 ionized impurities; Putley 1960), replacing the applied factor
    #[serde(default)]
    pub hall_factor_scattering_exponent: Option<f64>,
    /// instead of hall_factor: r_H(T) as [temperature_K, hall_factor] pairs, linear in T
    /// between them and the end values beyond; replaces the factor hall.reduce applied (its
    /// hall_factor column)
    #[serde(default)]
    #[schemars(length(min = 1), extend("items" = {"type": "array", "items": {"type": "number", "exclusiveMinimum": 0}, "minItems": 2, "maxItems": 2}))]
    pub hall_factor_table: Option<Vec<[f64; 2]>>,
}

impl DensityHallFactorParams {
    pub(crate) fn setting(&self) -> Result<HallFactor, AnalysisError> {
        hall_factor_setting(
            self.hall_factor,
            self.hall_factor_scattering_exponent,
            self.hall_factor_table.as_deref(),
        )
    }
}

/// The Hall factor of the scattering fit, which divides the Hall mobilities by it.
#[derive(Debug, Default, Deserialize, JsonSchema)]
pub struct MobilityHallFactorParams {
    /// apply a constant Hall factor r_H before fitting (n = r_H n_H, mu = mu_H / r_H); default
    /// 1: use the values as given (hall.reduce already applies the sample sheet's factor)
    #[serde(default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub hall_factor: Option<f64>,
    /// instead of hall_factor: r_H of a relaxation time tau ~ E^s (s = -0.5 acoustic phonons,
    /// 1.5 ionized impurities; Putley 1960)
    #[serde(default)]
    pub hall_factor_scattering_exponent: Option<f64>,
}

impl MobilityHallFactorParams {
    pub(crate) fn setting(&self) -> Result<HallFactor, AnalysisError> {
        hall_factor_setting(self.hall_factor, self.hall_factor_scattering_exponent, None)
    }
}

/// The rule of every Hall-factor group: one of `hall_factor`,
/// `hall_factor_scattering_exponent` and `hall_factor_table` at most.
fn hall_factor_setting(
    constant: Option<f64>,
    exponent: Option<f64>,
    table: Option<&[[f64; 2]]>,
) -> Result<HallFactor, AnalysisError> {
    match (constant, exponent, table) {
        (None, None, None) => Ok(HallFactor::Unity),
        (Some(value), None, None) => Ok(HallFactor::Constant(value)),
        (None, Some(exponent), None) => Ok(HallFactor::ScatteringExponent(exponent)),
        (None, None, Some(table)) => Ok(HallFactor::Table(table.iter().map(|pair| (pair[0], pair[1])).collect())),
        (_, _, None) => Err(invalid(
            "give either hall_factor or hall_factor_scattering_exponent, not both",
        )),
        _ => Err(invalid(
            "give one of hall_factor, hall_factor_scattering_exponent and hall_factor_table, not several",
        )),
    }
}

/// The temperatures fitted: every point when neither bound is given.
#[derive(Debug, Default, Deserialize, JsonSchema)]
pub struct TemperatureRangeParams {
    /// use only points at or above this temperature
    #[serde(rename = "temperature_min_K", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub temperature_min_k: Option<f64>,
    /// use only points at or below this temperature
    #[serde(rename = "temperature_max_K", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub temperature_max_k: Option<f64>,
}

impl TemperatureRangeParams {
    /// `None` without bounds; an open side is 0 or infinity.
    pub(crate) fn range(&self) -> Result<Option<(f64, f64)>, AnalysisError> {
        match (self.temperature_min_k, self.temperature_max_k) {
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
}

/// The uncertainty budget of the temperature-series density fits (freeze-out and
/// Arrhenius): the Hall factor, the floor of the statistical weights, and the temperature's
/// uncertainty where the table does not give one.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct BudgetParams {
    #[serde(flatten)]
    pub hall_factor: DensityHallFactorParams,
    /// smallest relative statistical density uncertainty a point keeps, so that no point pins
    /// the fit
    #[serde(default = "relative_uncertainty_floor")]
    #[schemars(range(min = 0), extend("exclusiveMaximum" = 1))]
    pub relative_uncertainty_floor: f64,
    /// standard uncertainty of the temperature for rows without temperature_K_unc, K;
    /// default: not given (0)
    #[serde(rename = "temperature_uncertainty_K", default)]
    #[schemars(range(min = 0))]
    pub temperature_uncertainty_k: Option<f64>,
}

/// The comparison of two impurity counts (the scattering fit's and the freeze-out fit's).
#[derive(Debug, Deserialize, JsonSchema)]
pub struct ConsistencyParams {
    /// the two impurity counts agree within this many combined standard uncertainties
    /// (common practice: 2)
    #[serde(default = "ConsistencyParams::sigma_multiple")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub consistency_sigma_multiple: f64,
    /// relative uncertainty allowed for the scattering theory itself in the comparison
    #[serde(default = "ConsistencyParams::model_relative_uncertainty")]
    #[schemars(range(min = 0))]
    pub model_relative_uncertainty: f64,
}

/// The defaults are those of [`ConsistencyTolerance`], so they are stated once.
impl ConsistencyParams {
    fn sigma_multiple() -> f64 {
        ConsistencyTolerance::default().sigma_multiple
    }
    fn model_relative_uncertainty() -> f64 {
        ConsistencyTolerance::default().model_relative_uncertainty
    }

    pub(crate) fn tolerance(&self) -> ConsistencyTolerance {
        ConsistencyTolerance {
            sigma_multiple: self.consistency_sigma_multiple,
            model_relative_uncertainty: self.model_relative_uncertainty,
        }
    }
}

/// The floor every fit of this plugin defaults to (`mobilis_numerics::fit`).
fn relative_uncertainty_floor() -> f64 {
    RELATIVE_UNCERTAINTY_FLOOR
}

/// A carrier type read from a table cell: empty is "not stated", anything but n or p is the
/// table's error, named with `what` (which table and row).
pub(crate) fn table_carrier_type(text: Option<&str>, what: &str) -> Result<Option<CarrierType>, AnalysisError> {
    match text {
        None | Some("") => Ok(None),
        Some(text) => CarrierType::parse(text)
            .map(Some)
            .ok_or_else(|| invalid(format!("{what}: carrier_type `{text}` is unknown; use n or p"))),
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
        sdk::optional_float_column(hall, "density_m3_unc_stat")?
    } else {
        sdk::optional_float_column(hall, "density_m3_unc")?
    };
    let systematic = sdk::optional_float_column(hall, "density_m3_unc_sys")?;
    let temperature_unc = sdk::optional_float_column(hall, "temperature_K_unc")?;
    let applied_hall_factor = sdk::optional_float_column(hall, "hall_factor")?;
    let types = sdk::optional_string_column(hall, "carrier_type")?;
    let mut points = Vec::with_capacity(hall.height());
    let mut skipped = 0;
    for row in 0..hall.height() {
        let (Some(temperature_k), Some(density_m3)) = (temperatures[row], densities[row]) else {
            skipped += 1;
            continue;
        };
        points.push(DensityPoint {
            temperature_k,
            density_m3,
            density_unc_m3: statistical[row],
            density_unc_sys_m3: systematic[row],
            temperature_unc_k: temperature_unc[row],
            applied_hall_factor: applied_hall_factor[row],
            carrier_type: table_carrier_type(types[row].as_deref(), &mobilis_sdk::sdk::data_row(row))?,
        });
    }
    if points.is_empty() && skipped > 0 {
        return Err(no_density_rows(hall, skipped));
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

/// Why a table whose every row lacks a temperature or a density gives no series, and what
/// to change: a Hall reduction without a thickness (a 2D sheet) has sheet densities but no
/// volume densities, which a temperature series of a crystal needs.
fn no_density_rows(hall: &DataFrame, skipped: usize) -> AnalysisError {
    let sheet_densities = sdk::optional_float_column(hall, "sheet_density_m2")
        .map(|column| column.iter().filter(|value| value.is_some()).count())
        .unwrap_or(0);
    if sheet_densities > 0 {
        invalid(format!(
            "density_m3 is null in all {skipped} rows while sheet_density_m2 has {sheet_densities} values: the Hall reduction had no thickness (a 2D sheet), and the series needs volume densities; give thickness_m in the sample sheet of hall.reduce and reduce again"
        ))
    } else {
        invalid(format!(
            "none of the {skipped} rows has both a temperature_K and a density_m3: the Hall reduction gave no densities (no field readings at ±B, or no carrier type); reduce readings taken at +B and -B"
        ))
    }
}

/// Sets summary keys `name` and `name_unc`.
pub(crate) fn summary_estimate(output: &mut OutputBuilder, name: &str, value: f64, uncertainty: Option<f64>) {
    output.summary(name, value).summary(&format!("{name}_unc"), uncertainty);
}
