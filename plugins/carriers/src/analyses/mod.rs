//! Table glue of the carriers analyses: the parameter groups they share (material, carrier
//! type, Hall factor, temperature range, uncertainty budget, consistency tolerance), each a
//! typed struct flattened into the analyses' parameters, and reading the `hall` role.

pub mod arrhenius_fit;
pub mod freeze_out_fit;
pub mod mobility_scattering;
pub mod purity_summary;

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
            carrier_type: table_carrier_type(types[row].as_deref(), &format!("row {row}"))?,
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

/// Sets summary keys `name` and `name_unc`.
pub(crate) fn summary_estimate(output: &mut OutputBuilder, name: &str, value: f64, uncertainty: Option<f64>) {
    output.summary(name, value).summary(&format!("{name}_unc"), uncertainty);
}

#[cfg(test)]
mod tests {
    use super::arrhenius_fit::{ArrheniusAnalysis, ArrheniusParams};
    use super::freeze_out_fit::{FreezeOutFitAnalysis, FreezeOutParams};
    use super::mobility_scattering::{MobilityColumn, MobilityScatteringAnalysis, NeutralChoice, ScatteringParams};
    use super::purity_summary::{PurityAnalysis, PurityParams};
    use super::*;
    use crate::arrhenius::ArrheniusRegime;
    use crate::freeze_out::FreezeOutSettings;
    use crate::materials::PRESET_NAMES;
    use crate::scattering::{IonizedDensityModel, IonizedImpurityFormula};
    use mobilis_sdk::sdk::{declaration_of, Analysis};
    use serde_json::{json, Value};

    fn schema<A: Analysis>() -> Value {
        declaration_of::<A>().params
    }

    /// The wire names a derived enum schema admits (`oneOf` of constants, or `enum`), with
    /// `null` for an optional one.
    fn choices(property: &Value) -> Vec<Value> {
        if let Some(values) = property.get("enum") {
            return values.as_array().unwrap().clone();
        }
        let options = property
            .get("oneOf")
            .or_else(|| property.get("anyOf"))
            .unwrap_or_else(|| panic!("no choices in {property}"));
        options
            .as_array()
            .unwrap()
            .iter()
            .flat_map(|option| match (option.get("const"), option.get("type")) {
                (Some(value), _) => vec![value.clone()],
                (None, Some(kind)) if kind == "null" => vec![Value::Null],
                _ => choices(option),
            })
            .collect()
    }

    #[test]
    fn omitted_parameters_take_the_documented_defaults() {
        let freeze_out: FreezeOutParams = serde_json::from_str("{}").unwrap();
        let defaults = FreezeOutSettings::default();
        assert_eq!(freeze_out.material.material, MaterialPreset::Silicon);
        assert_eq!(freeze_out.carrier_type, None);
        assert_eq!(freeze_out.curve_points, defaults.curve_points);
        assert_eq!(
            (freeze_out.compensation_bounds[0], freeze_out.compensation_bounds[1]),
            defaults.compensation_bounds
        );
        assert_eq!(freeze_out.budget.relative_uncertainty_floor, RELATIVE_UNCERTAINTY_FLOOR);
        assert!(matches!(
            freeze_out.budget.hall_factor.setting().unwrap(),
            HallFactor::Unity
        ));
        assert_eq!(freeze_out.temperature_range.range().unwrap(), None);

        let arrhenius: ArrheniusParams = serde_json::from_str("{}").unwrap();
        assert_eq!(arrhenius.regime, ArrheniusRegime::Compensated);
        assert_eq!(arrhenius.min_points, 4);

        let scattering: ScatteringParams = serde_json::from_str("{}").unwrap();
        assert_eq!(scattering.formula, IonizedImpurityFormula::BrooksHerring);
        assert_eq!(scattering.ionized_density, IonizedDensityModel::Constant);
        assert_eq!(scattering.neutral, NeutralChoice::None);
        assert_eq!(scattering.mobility_column, MobilityColumn::Hall);
        assert_eq!(scattering.charge_number, 1.0);
        assert_eq!(scattering.consistency.consistency_sigma_multiple, 2.0);

        let purity: PurityParams = serde_json::from_str("{}").unwrap();
        assert_eq!(
            purity.consistency.model_relative_uncertainty,
            ConsistencyTolerance::default().model_relative_uncertainty
        );
        // The schema states the same defaults.
        let properties = &schema::<MobilityScatteringAnalysis>()["properties"];
        assert_eq!(properties["formula"]["default"], json!("brooks_herring"));
        assert_eq!(properties["material"]["default"], json!("Si"));
        assert_eq!(properties["consistency_sigma_multiple"]["default"], json!(2.0));
    }

    #[test]
    fn every_choice_is_a_closed_list_with_todays_wire_names() {
        let presets: Vec<Value> = PRESET_NAMES.iter().map(|name| json!(name)).collect();
        for (name, schema) in [
            ("freeze_out_fit", schema::<FreezeOutFitAnalysis>()),
            ("mobility_scattering", schema::<MobilityScatteringAnalysis>()),
        ] {
            assert_eq!(choices(&schema["properties"]["material"]), presets, "{name}");
        }
        for schema in [
            schema::<FreezeOutFitAnalysis>(),
            schema::<ArrheniusAnalysis>(),
            schema::<MobilityScatteringAnalysis>(),
        ] {
            assert_eq!(
                choices(&schema["properties"]["carrier_type"]),
                vec![json!("n"), json!("p"), Value::Null]
            );
            assert_eq!(schema["additionalProperties"], json!(false));
        }
        let scattering = schema::<MobilityScatteringAnalysis>();
        let properties = &scattering["properties"];
        assert_eq!(
            choices(&properties["neutral"]),
            vec![json!("none"), json!("fitted"), json!("from_carriers")]
        );
        assert_eq!(
            choices(&properties["mobility_column"]),
            vec![json!("hall_mobility_m2_per_Vs"), json!("drift_mobility_m2_per_Vs")]
        );
        assert_eq!(
            choices(&properties["ionized_density"]),
            vec![json!("constant"), json!("carriers_plus_compensation")]
        );
        assert_eq!(
            choices(&schema::<ArrheniusAnalysis>()["properties"]["regime"]),
            vec![json!("compensated"), json!("uncompensated")]
        );
        assert_eq!(
            schema::<PurityAnalysis>()["properties"]
                .as_object()
                .unwrap()
                .keys()
                .collect::<Vec<_>>(),
            ["consistency_sigma_multiple", "model_relative_uncertainty"]
        );
    }

    #[test]
    fn bad_values_are_refused_by_name() {
        // An unknown choice names the choices.
        let error = serde_json::from_str::<FreezeOutParams>(r#"{"material": "Sn"}"#).unwrap_err();
        assert!(error.to_string().contains("4H-SiC"), "{error}");
        let error = serde_json::from_str::<ScatteringParams>(r#"{"neutral": "some"}"#).unwrap_err();
        assert!(error.to_string().contains("from_carriers"), "{error}");
        // The bounds the host checks are in the schema.
        let floor = &schema::<FreezeOutFitAnalysis>()["properties"]["relative_uncertainty_floor"];
        assert_eq!((&floor["minimum"], &floor["exclusiveMaximum"]), (&json!(0), &json!(1)));
        let table = &schema::<ArrheniusAnalysis>()["properties"]["hall_factor_table"];
        assert_eq!(table["items"]["maxItems"], json!(2));
        assert_eq!(table["items"]["items"]["exclusiveMinimum"], json!(0));
        // The cross-parameter rules stay the plugin's.
        let params: ArrheniusParams =
            serde_json::from_str(r#"{"hall_factor": 1.1, "hall_factor_table": [[20, 1.2]]}"#).unwrap();
        let error = params.budget.hall_factor.setting().unwrap_err();
        assert!(error.to_string().contains("hall_factor_table"), "{error}");
        let params: ScatteringParams =
            serde_json::from_str(r#"{"temperature_min_K": 300, "temperature_max_K": 30}"#).unwrap();
        let error = params.temperature_range.range().unwrap_err();
        assert!(error.to_string().contains("temperature_min_K"), "{error}");
    }

    #[test]
    fn a_table_cell_that_is_no_carrier_type_names_its_row() {
        assert_eq!(table_carrier_type(Some(""), "row 3").unwrap(), None);
        assert_eq!(
            table_carrier_type(Some("holes"), "row 3").unwrap(),
            Some(CarrierType::P)
        );
        let error = table_carrier_type(Some("x"), "row 3").unwrap_err();
        assert!(error.to_string().contains("row 3: carrier_type `x`"), "{error}");
    }
}
