//! The shared parameter groups of the carriers analyses, checked through the schemas the
//! host validates against: today's wire names and bounds, the documented defaults, and the
//! plugin's own cross-parameter rules.

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
