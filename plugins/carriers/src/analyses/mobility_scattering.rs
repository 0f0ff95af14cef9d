//! `carriers.mobility_scattering`: table glue of [`crate::scattering`].
//!
//! Parameters beyond the shared ones: `formula` (`brooks_herring`, the default, or
//! `conwell_weisskopf`), `ionized_density` (`constant`: one N_I fitted;
//! `carriers_plus_compensation`: N_I = n + 2 N_comp with the measured n and N_comp fitted,
//! right for a series through freeze-out), `neutral` (Erginsoy's neutral-impurity term: `none`,
//! `fitted`, or `from_carriers`), `constant_term`, `charge_number`, `fixed_lattice_exponent`,
//! `mobility_column` (`hall_mobility_m2_per_Vs`, the default, or `drift_mobility_m2_per_Vs`).
//! With the freeze-out summary table as input role `freeze_out` the screening uses the
//! compensated density and the fitted count is compared with the freeze-out one:
//! `freeze_out_consistent` is true within `consistency_sigma_multiple` (2) combined standard
//! uncertainties, the theory included through `model_relative_uncertainty` (0.7 in ln N, see
//! [`crate::purity`]: on published silicon mobilities this model returns 1.3 to 3.4 times the
//! true doping between 1e16 and 1e18 cm^-3, so `false` means counts more than about a factor of
//! 4 apart). When N_I (or N_comp) ends on its lower bound the summary gives the profile upper
//! limit `ionized_impurity_density_upper_limit_m3` and `freeze_out_comparison: "upper_limit"`.
//! A warning says when Brooks-Herring is used where its screening parameter falls below 1.

use super::freeze_out_fit::hall_role;
use super::*;
use crate::purity::{ConsistencyTolerance, DopantDensities};
use crate::scattering::{
    fit_mobility_scattering, medium_for, IonizedDensityModel, IonizedImpurityFormula, MobilityPoint,
    NeutralImpurityModel, ScatteringFit, ScatteringSettings, ScreeningDensity,
};
use mobilis_numerics::fit::RELATIVE_UNCERTAINTY_FLOOR;
use mobilis_sdk::abi::{AnalysisDeclaration, InputRole};
use mobilis_sdk::sdk::{Analysis, AnalysisOutput, Host, Inputs};

pub struct MobilityScatteringAnalysis;

fn default_material() -> String {
    "Si".into()
}

#[derive(Debug, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ScatteringParams {
    #[serde(default = "default_material")]
    material: String,
    #[serde(default)]
    material_overrides: MaterialOverrideParams,
    #[serde(default)]
    carrier_type: Option<String>,
    #[serde(default)]
    formula: Option<String>,
    #[serde(default)]
    ionized_density: Option<String>,
    #[serde(default)]
    neutral: Option<String>,
    #[serde(default)]
    constant_term: bool,
    #[serde(default)]
    charge_number: Option<f64>,
    #[serde(default)]
    hall_factor: Option<f64>,
    #[serde(default)]
    hall_factor_scattering_exponent: Option<f64>,
    #[serde(rename = "temperature_min_K", default)]
    temperature_min_k: Option<f64>,
    #[serde(rename = "temperature_max_K", default)]
    temperature_max_k: Option<f64>,
    #[serde(default)]
    fixed_lattice_exponent: Option<f64>,
    #[serde(default)]
    consistency_sigma_multiple: Option<f64>,
    #[serde(default)]
    model_relative_uncertainty: Option<f64>,
    #[serde(default)]
    mobility_column: Option<String>,
    #[serde(default)]
    relative_uncertainty_floor: Option<f64>,
}

/// The `freeze_out` role: the summary table of `carriers.freeze_out_fit`.
pub(crate) fn freeze_out_role(required: bool) -> InputRole {
    use ColumnType::*;
    InputRole {
        role: "freeze_out".into(),
        required,
        description: "the summary table of carriers.freeze_out_fit (analysis.run summary_output), one row per sample"
            .into(),
        columns: vec![
            column("dopant_density_m3", F64, Some("m3"), "majority dopant density"),
            column("dopant_density_m3_unc", F64, Some("m3"), "its uncertainty").optional(),
            column("compensating_density_m3", F64, Some("m3"), "compensating density"),
            column("compensating_density_m3_unc", F64, Some("m3"), "its uncertainty").optional(),
            column("dopant_compensating_covariance_m6", F64, None, "their covariance").optional(),
            column("carrier_type", Str, None, "n or p").optional(),
            column("sample", Str, None, "sample name").optional(),
            column(
                "material",
                Str,
                None,
                "the material preset of the fit (names candidate dopants)",
            )
            .optional(),
            column(
                "ionization_energy_eV",
                F64,
                Some("eV"),
                "the majority level's ionization energy",
            )
            .optional(),
            column("ionization_energy_eV_unc", F64, Some("eV"), "its uncertainty").optional(),
        ],
    }
}

/// One row of a freeze-out summary table: the row of `sample` when both tables name
/// samples, else the only row.
pub(crate) fn freeze_out_densities(
    table: &DataFrame,
    sample: Option<&str>,
) -> Result<(DopantDensities, Option<CarrierType>), AnalysisError> {
    let samples = optional_strings(table, "sample")?;
    let row = match sample {
        Some(name) if samples.iter().any(|s| s.is_some()) => samples
            .iter()
            .position(|s| s.as_deref() == Some(name))
            .ok_or_else(|| invalid(format!("the freeze_out table has no row for sample `{name}`")))?,
        _ if table.height() == 1 => 0,
        _ => {
            return Err(invalid(format!(
                "the freeze_out table has {} rows and no sample to match; run with group_by sample or pass one row",
                table.height()
            )))
        }
    };
    let value = |name: &str| -> Result<Option<f64>, AnalysisError> { Ok(optional_floats(table, name)?[row]) };
    let densities = DopantDensities {
        dopant_density_m3: value("dopant_density_m3")?
            .ok_or_else(|| invalid("the freeze_out table's dopant_density_m3 is empty"))?,
        dopant_density_unc_m3: value("dopant_density_m3_unc")?,
        compensating_density_m3: value("compensating_density_m3")?
            .ok_or_else(|| invalid("the freeze_out table's compensating_density_m3 is empty"))?,
        compensating_density_unc_m3: value("compensating_density_m3_unc")?,
        covariance_m6: value("dopant_compensating_covariance_m6")?,
    };
    let carrier_type = parse_carrier_type(optional_strings(table, "carrier_type")?[row].as_deref())?;
    Ok((densities, carrier_type))
}

/// The statistical and systematic uncertainties of the chosen mobility column, per row
/// (absolute), and the column the weights come from. The statistical part is the column's
/// `_unc_stat`; for the drift mobility without one, the Hall mobility's relative `_unc_stat`
/// (hall.reduce divides by one Hall factor per sample, which leaves relative errors alone);
/// failing both, the column's `_unc` taken as statistical, with a warning that no calibration
/// budget was given. The systematic part likewise from `_unc_sys`.
#[allow(clippy::type_complexity)]
fn mobility_budget(
    hall: &DataFrame,
    mobility_column: &str,
    mobilities: &[Option<f64>],
    warnings: &mut Vec<String>,
) -> Result<(Vec<Option<f64>>, Vec<Option<f64>>, Option<String>), AnalysisError> {
    const HALL: &str = "hall_mobility_m2_per_Vs";
    let present = |name: &str| hall.column(name).is_ok();
    // `part` of the Hall mobility carried over to the chosen column as a relative error.
    let from_hall = |part: &str| -> Result<Vec<Option<f64>>, AnalysisError> {
        let hall_values = optional_floats(hall, HALL)?;
        let hall_part = optional_floats(hall, &format!("{HALL}_{part}"))?;
        Ok(mobilities
            .iter()
            .zip(hall_values.iter().zip(&hall_part))
            .map(|(value, (hall_value, unc))| Some(value.as_ref()?.abs() * unc.as_ref()? / hall_value.as_ref()?.abs()))
            .collect())
    };
    let statistical = format!("{mobility_column}_unc_stat");
    let systematic = format!("{mobility_column}_unc_sys");
    let total = format!("{mobility_column}_unc");
    let carried_over = mobility_column != HALL;
    let (weights, source) = if present(&statistical) {
        (optional_floats(hall, &statistical)?, Some(statistical.clone()))
    } else if carried_over && present(&format!("{HALL}_unc_stat")) {
        (from_hall("unc_stat")?, Some(format!("{HALL}_unc_stat")))
    } else if present(&total) {
        warnings.push(format!(
            "the hall table has {total} but no {statistical}: it was taken as statistical, and no calibration \
             budget was given (give the hall.reduce output, or the _unc_stat and _unc_sys columns)"
        ));
        (optional_floats(hall, &total)?, Some(total.clone()))
    } else {
        (vec![None; hall.height()], None)
    };
    let calibration = if present(&systematic) {
        optional_floats(hall, &systematic)?
    } else if carried_over && present(&format!("{HALL}_unc_sys")) {
        from_hall("unc_sys")?
    } else {
        vec![None; hall.height()]
    };
    Ok((weights, calibration, source))
}

/// The single sample named in a table, if it names one.
pub(crate) fn single_sample(table: &DataFrame) -> Result<Option<String>, AnalysisError> {
    let mut names: Vec<String> = optional_strings(table, "sample")?.into_iter().flatten().collect();
    names.sort();
    names.dedup();
    match names.len() {
        0 => Ok(None),
        1 => Ok(names.pop()),
        _ => Err(invalid(format!(
            "the table holds several samples ({}); run with group_by sample",
            names.join(", ")
        ))),
    }
}

impl Analysis for MobilityScatteringAnalysis {
    const NAME: &'static str = "carriers.mobility_scattering";
    type Params = ScatteringParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let tolerance = ConsistencyTolerance::default();
        let mut properties = material_schema_properties();
        properties.insert("formula".into(), json!({"type": "string", "enum": ["brooks_herring", "conwell_weisskopf"], "default": "brooks_herring", "description": "ionized-impurity scattering: screened (Brooks-Herring) or bare Coulomb with a cut-off (Conwell-Weisskopf)"}));
        properties.insert("ionized_density".into(), json!({"type": "string", "enum": ["constant", "carriers_plus_compensation"], "default": "constant", "description": "constant: one N_I fitted; carriers_plus_compensation: N_I = n + 2 N_comp at each point with N_comp fitted (needs density_m3)"}));
        properties.insert("neutral".into(), json!({"type": "string", "enum": ["none", "fitted", "from_carriers"], "default": "none", "description": "neutral-impurity scattering (Erginsoy): none, a fitted constant density, or N_D - N_A - n from the freeze_out input"}));
        properties.insert(
            "constant_term".into(),
            json!({"type": "boolean", "default": false, "description": "fit a temperature-independent mobility term"}),
        );
        properties.insert("charge_number".into(), json!({"type": "number", "exclusiveMinimum": 0, "default": 1, "description": "charge number Z of the ionized impurities"}));
        properties.insert("mobility_column".into(), json!({"type": "string", "enum": ["hall_mobility_m2_per_Vs", "drift_mobility_m2_per_Vs"], "default": "hall_mobility_m2_per_Vs", "description": "which mobility of the hall table to fit: the Hall mobility, or the drift mobility hall.reduce derived with the sample sheet's Hall factor"}));
        properties.insert("fixed_lattice_exponent".into(), json!({"type": "number", "minimum": 0, "description": "hold the lattice exponent at this value instead of fitting it"}));
        properties.insert("consistency_sigma_multiple".into(), json!({"type": "number", "exclusiveMinimum": 0, "default": tolerance.sigma_multiple, "description": "the two impurity counts agree within this many combined standard uncertainties (common practice: 2)"}));
        properties.insert("relative_uncertainty_floor".into(), json!({"type": "number", "minimum": 0, "exclusiveMaximum": 1, "default": RELATIVE_UNCERTAINTY_FLOOR, "description": "the smallest relative uncertainty a mobility keeps in the weights, so that no point can pin the fit"}));
        properties.insert("model_relative_uncertainty".into(), json!({"type": "number", "minimum": 0, "default": tolerance.model_relative_uncertainty, "description": "relative uncertainty allowed for the scattering theory itself in the comparison"}));
        AnalysisDeclaration {
            name: String::new(),
            summary: "Lattice exponent and ionized-impurity density from mobility against temperature (Matthiessen's rule), compared with the freeze-out count".into(),
            description: "1/mu = 1/mu_L + 1/mu_I (+ 1/mu_N + 1/mu_C) with mu_L = mu_300 (T/300)^-alpha and Brooks-Herring or Conwell-Weisskopf ionized-impurity scattering, fitted in ln mu from several starts. Points are weighted by the mobility's statistical uncertainty (_unc_stat, floored at relative_uncertainty_floor) widened by temperature_K_unc through the model's slope (effective variance); calibration errors common to the series (_unc_sys of the mobility and of density_m3) are applied once after the fit, as _unc_sys of each result; the covariance is scaled by the Birge ratio when chi-square says the model misses the data. Given the freeze-out summary (role freeze_out), Brooks-Herring screening uses the compensated screening density and the fitted N_I is compared with the freeze-out densities: two independent counts of the same impurities (an upper limit when the mobility cannot determine N_I).".into(),
            params: json!({"type": "object", "additionalProperties": false, "properties": properties}),
            inputs: vec![
                hall_role(vec![
                    column("hall_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "Hall mobility"),
                    column("hall_mobility_m2_per_Vs_unc", F64, Some("m2_per_Vs"), "its total uncertainty; weights the fit when the _stat column is absent").optional(),
                    column("hall_mobility_m2_per_Vs_unc_stat", F64, Some("m2_per_Vs"), "its statistical uncertainty; weights the fit").optional(),
                    column("hall_mobility_m2_per_Vs_unc_sys", F64, Some("m2_per_Vs"), "its calibration uncertainty common to the series; applied after the fit").optional(),
                    column("drift_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "drift mobility (mobility_column)").optional(),
                    column("drift_mobility_m2_per_Vs_unc", F64, Some("m2_per_Vs"), "its uncertainty").optional(),
                    column("drift_mobility_m2_per_Vs_unc_stat", F64, Some("m2_per_Vs"), "its statistical uncertainty").optional(),
                    column("drift_mobility_m2_per_Vs_unc_sys", F64, Some("m2_per_Vs"), "its calibration uncertainty").optional(),
                    column("density_m3", F64, Some("m3"), "carrier density (screening, comparison)").optional(),
                    column("density_m3_unc_sys", F64, Some("m3"), "its calibration uncertainty common to the series").optional(),
                    column("temperature_K_unc", F64, Some("K"), "standard uncertainty of the temperature; propagated through the model's slope").optional(),
                ]),
                freeze_out_role(false),
            ],
            outputs: vec![
                column("temperature_K", F64, Some("K"), "temperature"),
                column("in_fit_range", Bool, None, "the point was fitted"),
                column("mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "measured mobility after the Hall-factor correction"),
                column("mobility_m2_per_Vs_unc", F64, Some("m2_per_Vs"), "its uncertainty"),
                column("fitted_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "the model"),
                column("lattice_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "lattice term"),
                column("ionized_impurity_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "ionized-impurity term"),
                column("neutral_impurity_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "neutral-impurity term"),
                column("constant_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "temperature-independent term"),
                column("ionized_density_m3", F64, Some("m3"), "N_I at this point"),
                column("screening_density_m3", F64, Some("m3"), "Brooks-Herring screening density"),
                column("log_residual", F64, None, "ln(data) - ln(model)"),
                column("normalized_residual", F64, None, "the log residual over the uncertainty the fit weighted it by (floor and temperature included)"),
            ],
            summary_keys: vec![
                column("compensating_density_m3", ColumnType::F64, Some("m3"), "N_comp of the carriers-plus-compensation model, with _unc"),
                column("compensating_density_upper_limit_m3", ColumnType::F64, Some("m3"), "upper limit of N_comp when it is not resolved"),
                column("neutral_impurity_density_m3", ColumnType::F64, Some("m3"), "neutral impurity density when fitted, with _unc"),
                column("constant_mobility_m2_per_Vs", ColumnType::F64, Some("m2_per_Vs"), "the constant mobility term when fitted, with _unc"),
                column("carrier_type", ColumnType::Str, None, "n or p"),
                column("formula", ColumnType::Str, None, "ionized-impurity formula used"),
                column("lattice_exponent_fixed", ColumnType::Bool, None, "the lattice exponent was fixed, not fitted"),
                column("weighted", ColumnType::Bool, None, "the fit used the stated uncertainties"),
                column("weights_column", ColumnType::Str, None, "the column the weights came from"),
                column("calibrations_not_stated", ColumnType::Str, None, "list of the calibrations not stated (their defaults were assumed)"),
                column("degrees_of_freedom", ColumnType::I64, None, "points minus fitted parameters"),
                column("points_used", ColumnType::I64, None, "points fitted"),
                column("hall_factor", ColumnType::F64, None, "Hall scattering factor used"),
                column("mobility_column", ColumnType::Str, None, "the mobility column fitted"),
                column("relative_uncertainty_floor", ColumnType::F64, None, "the floor applied to relative uncertainties"),
                column("temperature_uncertainty_used", ColumnType::Bool, None, "temperature uncertainties entered the weights"),
                column("freeze_out_reference_m3", ColumnType::F64, Some("m3"), "the freeze-out fit's density compared with"),
                column("freeze_out_reference_basis", ColumnType::Str, None, "which freeze-out density was compared with"),
                column("density_ratio", ColumnType::F64, None, "N_I over the freeze-out reference, with _unc"),
                column("deviation_sigma", ColumnType::F64, None, "deviation from the freeze-out reference in standard uncertainties"),
                column("freeze_out_comparison", ColumnType::Str, None, "upper_limit when the comparison is a bound only"),
                column("lattice_exponent", F64, None, "alpha of mu_L ~ T^-alpha, with _unc, _unc_stat and _unc_sys"),
                column("lattice_mobility_300K_m2_per_Vs", F64, Some("m2_per_Vs"), "mu_L at 300 K, with _unc, _unc_stat and _unc_sys"),
                column("ionized_impurity_density_m3", F64, Some("m3"), "N_I, with _unc, _unc_stat and _unc_sys"),
                column("ionized_impurity_density_upper_limit_m3", F64, Some("m3"), "when the mobility does not determine N_I: the largest it allows"),
                column("freeze_out_consistent", Bool, None, "the scattering and freeze-out counts agree"),
                column("reduced_chi_square", F64, None, "chi^2 / nu"),
                column("chi_square_p_value", F64, None, "P(chi^2_nu >= chi^2) of a weighted fit"),
                column("birge_ratio", F64, None, "the factor the uncertainties were scaled by (1: not scaled)"),
                column("floored_points", I64, None, "points whose uncertainty was raised to relative_uncertainty_floor"),
            ],
            figures: crate::figures::mobility_scattering(),
            ..Default::default()
        }
    }

    fn run(params: ScatteringParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let hall = inputs.required("hall")?;
        let mut warnings = Vec::new();
        let sample = single_sample(hall)?;
        let freeze_out = match inputs.optional("freeze_out") {
            Some(table) => Some(freeze_out_densities(table, sample.as_deref())?),
            None => None,
        };
        let series = read_series(&params, hall, &mut warnings)?;
        let carrier_type = series_carrier_type(&params, &series.types, freeze_out.as_ref())?;
        let settings = scattering_settings(&params, carrier_type, &series, freeze_out.as_ref(), &mut warnings)?;
        host.progress(0.1, "fitting");
        host.check_cancelled()?;
        let fit = fit_mobility_scattering(&series.points, &settings, freeze_out.as_ref().map(|(d, _)| d)).map_err(
            |error| match error {
                crate::scattering::ScatteringError::FitFailed(_) => AnalysisError::Numerical(error.to_string()),
                other => invalid(other.to_string()),
            },
        )?;
        let mut output = AnalysisOutput::new(fit_table(&fit)?);
        fill_summary(
            &mut output.summary,
            &fit,
            &settings,
            carrier_type,
            &series,
            &mut warnings,
        );
        warnings.extend(fit.warnings.iter().cloned());
        output.warnings = warnings;
        host.progress(1.0, "done");
        Ok(output)
    }
}

/// The series as read from the hall table: its points, the carrier types it states, and the
/// budget of its mobility column.
struct ScatteringSeries<'a> {
    points: Vec<MobilityPoint>,
    types: Vec<Option<String>>,
    mobility_column: &'a str,
    weight_column: Option<String>,
    mobility_scale_relative_unc: Option<f64>,
    density_scale_relative_unc: Option<f64>,
}

/// Reading: the points of the hall table with their uncertainties, and the common
/// calibration scales of the mobility and the density.
fn read_series<'a>(
    params: &'a ScatteringParams,
    hall: &DataFrame,
    warnings: &mut Vec<String>,
) -> Result<ScatteringSeries<'a>, AnalysisError> {
    let temperatures = sdk::float_column(hall, "temperature_K")?;
    let mobility_column = params.mobility_column.as_deref().unwrap_or("hall_mobility_m2_per_Vs");
    let mobilities = sdk::float_column(hall, mobility_column)?;
    // The fit weights by the statistical part; a table without one (not from hall.reduce,
    // or from an older version) has its total taken as statistical.
    let (uncertainties, mobility_systematic, weight_column) =
        mobility_budget(hall, mobility_column, &mobilities, warnings)?;
    let temperature_uncertainties = optional_floats(hall, "temperature_K_unc")?;
    let densities = optional_floats(hall, "density_m3")?;
    let density_systematic = optional_floats(hall, "density_m3_unc_sys")?;
    // A calibration error is one scale for the whole series: its relative size, the
    // largest a row states (rows normally state the same).
    let common_scale = |values: &[Option<f64>], systematic: &[Option<f64>]| -> Option<f64> {
        values
            .iter()
            .zip(systematic)
            .filter_map(|(value, unc)| Some(unc.as_ref()? / value.as_ref()?.abs()))
            .filter(|relative| relative.is_finite() && *relative >= 0.0)
            .reduce(f64::max)
    };
    let mobility_scale_relative_unc = common_scale(&mobilities, &mobility_systematic);
    let density_scale_relative_unc = common_scale(&densities, &density_systematic);
    let types = optional_strings(hall, "carrier_type")?;
    let mut points = Vec::new();
    for row in 0..hall.height() {
        let (Some(temperature_k), Some(mobility)) = (temperatures[row], mobilities[row]) else {
            continue;
        };
        points.push(MobilityPoint {
            temperature_k,
            mobility_m2_per_vs: mobility.abs(),
            mobility_unc_m2_per_vs: uncertainties[row],
            temperature_unc_k: temperature_uncertainties[row],
            carrier_density_m3: densities[row],
        });
    }
    if points.len() < hall.height() {
        warnings.push(format!(
            "{} rows without a temperature or mobility were skipped",
            hall.height() - points.len()
        ));
    }
    Ok(ScatteringSeries {
        points,
        types,
        mobility_column,
        weight_column,
        mobility_scale_relative_unc,
        density_scale_relative_unc,
    })
}

/// The carrier type: forced, else the one the series states, else the freeze-out's, else n.
fn series_carrier_type(
    params: &ScatteringParams,
    types: &[Option<String>],
    freeze_out: Option<&(DopantDensities, Option<CarrierType>)>,
) -> Result<CarrierType, AnalysisError> {
    Ok(match parse_carrier_type(params.carrier_type.as_deref())? {
        Some(forced) => forced,
        None => {
            let mut seen: Vec<&str> = types.iter().flatten().map(String::as_str).collect();
            seen.sort();
            seen.dedup();
            match seen.as_slice() {
                [] => freeze_out.and_then(|(_, t)| *t).unwrap_or(CarrierType::N),
                [one] => parse_carrier_type(Some(one))?.expect("parsed"),
                _ => {
                    return Err(invalid(
                        "the carrier type changes within the series; fit one type (temperature_min_K/temperature_max_K) or force carrier_type",
                    ))
                }
            }
        }
    })
}

/// Settings: the medium of the material and carrier type, the model choices, the fit range
/// and tolerances, and the calibration scales of the series.
fn scattering_settings(
    params: &ScatteringParams,
    carrier_type: CarrierType,
    series: &ScatteringSeries,
    freeze_out: Option<&(DopantDensities, Option<CarrierType>)>,
    warnings: &mut Vec<String>,
) -> Result<ScatteringSettings, AnalysisError> {
    let points = &series.points;
    let material = resolve_material(&params.material, &params.material_overrides)?;
    let mut settings = ScatteringSettings::new(medium_for(&material, carrier_type));
    settings.formula = match params.formula.as_deref() {
        None | Some("brooks_herring") => IonizedImpurityFormula::BrooksHerring,
        Some("conwell_weisskopf") => IonizedImpurityFormula::ConwellWeisskopf,
        Some(other) => {
            return Err(invalid(format!(
                "formula `{other}` is unknown; use brooks_herring or conwell_weisskopf"
            )))
        }
    };
    settings.ionized_density = match params.ionized_density.as_deref() {
        None | Some("constant") => IonizedDensityModel::Constant,
        Some("carriers_plus_compensation") => IonizedDensityModel::CarriersPlusCompensation,
        Some(other) => {
            return Err(invalid(format!(
                "ionized_density `{other}` is unknown; use constant or carriers_plus_compensation"
            )))
        }
    };
    let have_densities = points.iter().all(|p| p.carrier_density_m3.is_some());
    settings.screening = match (freeze_out, have_densities) {
        (Some((densities, _)), true) => ScreeningDensity::Compensated {
            dopant_density_m3: densities.dopant_density_m3,
            compensating_density_m3: densities.compensating_density_m3,
        },
        (_, true) => ScreeningDensity::MeasuredCarriers,
        (_, false) => ScreeningDensity::ImpurityDensity,
    };
    settings.neutral = match params.neutral.as_deref() {
        None | Some("none") => NeutralImpurityModel::None,
        Some("fitted") => NeutralImpurityModel::FittedConstant,
        Some("from_carriers") => match freeze_out {
            Some((densities, _)) => NeutralImpurityModel::FromCarrierDensity {
                net_doping_m3: densities.dopant_density_m3 - densities.compensating_density_m3,
            },
            None => {
                return Err(invalid(
                    "neutral: from_carriers needs the freeze_out input (the net doping)",
                ))
            }
        },
        Some(other) => {
            return Err(invalid(format!(
                "neutral `{other}` is unknown; use none, fitted or from_carriers"
            )))
        }
    };
    settings.constant_term = params.constant_term;
    if let Some(z) = params.charge_number {
        settings.charge_number = z;
    }
    settings.hall_factor = hall_factor(params.hall_factor, params.hall_factor_scattering_exponent)?
        .value()
        .map_err(|e| invalid(e.to_string()))?;
    let range = temperature_range(params.temperature_min_k, params.temperature_max_k)?;
    settings.temperature_min_k = range.map(|r| r.0);
    settings.temperature_max_k = range.and_then(|r| r.1.is_finite().then_some(r.1));
    settings.fixed_lattice_exponent = params.fixed_lattice_exponent;
    if let Some(k) = params.consistency_sigma_multiple {
        settings.tolerance.sigma_multiple = k;
    }
    if let Some(m) = params.model_relative_uncertainty {
        settings.tolerance.model_relative_uncertainty = m;
    }
    if let Some(floor) = params.relative_uncertainty_floor {
        settings.relative_uncertainty_floor = floor;
    }
    settings.mobility_scale_relative_unc = series.mobility_scale_relative_unc;
    settings.density_scale_relative_unc = series.density_scale_relative_unc;
    let temperature_unc_given = points.iter().any(|point| point.temperature_unc_k.is_some());
    if temperature_unc_given && series.weight_column.is_none() {
        warnings.push(
            "temperature_K_unc was not used: the mobilities carry no uncertainty, so the fit is unweighted \
             (give the mobility's _unc_stat column to weigh the points)"
                .to_string(),
        );
    }
    Ok(settings)
}

/// The table: one row per point, with the fitted mobility, its parts and the residuals.
fn fit_table(fit: &ScatteringFit) -> Result<DataFrame, AnalysisError> {
    let rows = &fit.rows;
    frame(
        rows.len(),
        vec![
            float_series("temperature_K", rows.iter().map(|r| Some(r.temperature_k)).collect()),
            Column::new(
                "in_fit_range".into(),
                rows.iter().map(|r| r.in_fit_range).collect::<Vec<bool>>(),
            ),
            float_series(
                "mobility_m2_per_Vs",
                rows.iter().map(|r| Some(r.mobility_data)).collect(),
            ),
            float_series(
                "mobility_m2_per_Vs_unc",
                rows.iter().map(|r| r.mobility_data_unc).collect(),
            ),
            float_series(
                "fitted_mobility_m2_per_Vs",
                rows.iter().map(|r| r.mobility_fit).collect(),
            ),
            float_series(
                "lattice_mobility_m2_per_Vs",
                rows.iter().map(|r| r.mobility_lattice).collect(),
            ),
            float_series(
                "ionized_impurity_mobility_m2_per_Vs",
                rows.iter().map(|r| r.mobility_ionized).collect(),
            ),
            float_series(
                "neutral_impurity_mobility_m2_per_Vs",
                rows.iter().map(|r| r.mobility_neutral).collect(),
            ),
            float_series(
                "constant_mobility_m2_per_Vs",
                rows.iter().map(|r| r.mobility_constant).collect(),
            ),
            float_series(
                "ionized_density_m3",
                rows.iter().map(|r| r.ionized_density_m3).collect(),
            ),
            float_series(
                "screening_density_m3",
                rows.iter().map(|r| r.screening_density_m3).collect(),
            ),
            float_series("log_residual", rows.iter().map(|r| r.log_residual).collect()),
            float_series(
                "normalized_residual",
                rows.iter().map(|r| r.normalized_residual).collect(),
            ),
        ],
    )
}

/// The summary: the fitted parameters with their budgets, the fit quality, and the
/// comparison with the freeze-out count (a warning when they disagree).
fn fill_summary(
    summary: &mut serde_json::Map<String, Value>,
    fit: &ScatteringFit,
    settings: &ScatteringSettings,
    carrier_type: CarrierType,
    series: &ScatteringSeries,
    warnings: &mut Vec<String>,
) {
    summary.insert("carrier_type".into(), json!(carrier_type.as_str()));
    summary.insert("formula".into(), json!(fit.formula.name()));
    insert_estimate(
        summary,
        "lattice_exponent",
        fit.lattice_exponent.value,
        fit.lattice_exponent.uncertainty,
    );
    summary.insert("lattice_exponent_fixed".into(), json!(fit.lattice_exponent_fixed));
    insert_estimate(
        summary,
        "lattice_mobility_300K_m2_per_Vs",
        fit.lattice_mobility_300k_m2_per_vs.value,
        fit.lattice_mobility_300k_m2_per_vs.uncertainty,
    );
    insert_estimate(
        summary,
        "ionized_impurity_density_m3",
        fit.ionized_impurity_density_m3.value,
        fit.ionized_impurity_density_m3.uncertainty,
    );
    if let Some(limit) = fit.ionized_parameter_upper_limit_m3 {
        let name = match fit.ionized_density_model {
            IonizedDensityModel::Constant => "ionized_impurity_density_upper_limit_m3",
            IonizedDensityModel::CarriersPlusCompensation => "compensating_density_upper_limit_m3",
        };
        summary.insert(name.into(), json!(limit));
    }
    if let Some(estimate) = fit.compensating_density_m3 {
        insert_estimate(summary, "compensating_density_m3", estimate.value, estimate.uncertainty);
    }
    if let Some(estimate) = fit.neutral_impurity_density_m3 {
        insert_estimate(
            summary,
            "neutral_impurity_density_m3",
            estimate.value,
            estimate.uncertainty,
        );
    }
    if let Some(estimate) = fit.constant_mobility_m2_per_vs {
        insert_estimate(
            summary,
            "constant_mobility_m2_per_Vs",
            estimate.value,
            estimate.uncertainty,
        );
    }
    for (name, split) in &fit.budget {
        summary.insert(format!("{name}_unc_stat"), json!(split.statistical));
        summary.insert(format!("{name}_unc_sys"), json!(split.systematic));
    }
    let finite = |value: f64| if value.is_finite() { json!(value) } else { Value::Null };
    let goodness = &fit.goodness;
    summary.insert("reduced_chi_square".into(), finite(goodness.reduced_chi_square));
    summary.insert("chi_square_p_value".into(), finite(goodness.p_value));
    summary.insert("birge_ratio".into(), finite(goodness.birge_ratio));
    summary.insert("weighted".into(), json!(goodness.weighted));
    summary.insert("weights_column".into(), json!(series.weight_column));
    summary.insert("floored_points".into(), json!(goodness.floored_points));
    summary.insert(
        "relative_uncertainty_floor".into(),
        json!(settings.relative_uncertainty_floor),
    );
    summary.insert(
        "temperature_uncertainty_used".into(),
        json!(goodness.temperature_uncertainty_used),
    );
    summary.insert("calibrations_not_stated".into(), json!(fit.calibrations_not_stated));
    summary.insert("degrees_of_freedom".into(), json!(goodness.degrees_of_freedom));
    summary.insert("points_used".into(), json!(fit.points_used));
    summary.insert("hall_factor".into(), json!(fit.hall_factor));
    summary.insert("mobility_column".into(), json!(series.mobility_column));
    if let Some(comparison) = &fit.comparison {
        summary.insert("freeze_out_reference_m3".into(), json!(comparison.reference.value));
        summary.insert("freeze_out_reference_basis".into(), json!(comparison.basis.name()));
        summary.insert("density_ratio".into(), json!(comparison.ratio));
        summary.insert("density_ratio_unc".into(), json!(comparison.ratio_unc));
        summary.insert("deviation_sigma".into(), json!(comparison.deviation_sigma));
        summary.insert("freeze_out_consistent".into(), json!(comparison.consistent));
        if comparison.upper_limit_m3.is_some() {
            summary.insert("freeze_out_comparison".into(), json!("upper_limit"));
        }
        if !comparison.consistent {
            warnings.push(format!(
                "the scattering fit's {} ({:.3e} cm^-3) disagrees with the freeze-out {} ({:.3e} cm^-3) by {:.1} combined standard uncertainties",
                comparison.quantity.replace('_', " "),
                comparison.fitted.value * 1e-6,
                comparison.basis.description(),
                comparison.reference.value * 1e-6,
                comparison.deviation_sigma
            ));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scattering::{evaluate_model, ScatteringParameters};
    use mobilis_numerics::noise::Rng;
    use mobilis_sdk::sdk::run_typed;

    /// A hall table of n-Si mobilities from 30 to 400 K (Brooks-Herring on 1e16 cm^-3, a
    /// lattice law of 1448 (T/300)^-2.33 cm^2/Vs; invented test input), with 0.5 %
    /// statistical noise, a 1 % field calibration and 0.1 K of temperature uncertainty, as
    /// hall.reduce writes them.
    fn hall_table() -> DataFrame {
        let settings = ScatteringSettings {
            screening: ScreeningDensity::MeasuredCarriers,
            ..ScatteringSettings::new(medium_for(&Material::silicon(), CarrierType::N))
        };
        let truth = ScatteringParameters {
            lattice_mobility_300k_m2_per_vs: 0.1448,
            lattice_exponent: 2.33,
            ionized_density_m3: 1e22,
            neutral_density_m3: None,
            constant_mobility_m2_per_vs: None,
        };
        let mut rng = Rng::seeded(9);
        let temperatures: Vec<f64> = (0..38).map(|i| 30.0 + 10.0 * i as f64).collect();
        let mobilities: Vec<f64> = temperatures
            .iter()
            .map(|&t| {
                evaluate_model(&settings, &truth, t, Some(1e22)).unwrap().total * (1.0 + 0.005 * rng.standard_normal())
            })
            .collect();
        let column = |name: &str, values: Vec<f64>| Column::new(name.into(), values);
        DataFrame::new(
            temperatures.len(),
            vec![
                column("temperature_K", temperatures.clone()),
                column("temperature_K_unc", vec![0.1; temperatures.len()]),
                column("hall_mobility_m2_per_Vs", mobilities.clone()),
                column(
                    "hall_mobility_m2_per_Vs_unc_stat",
                    mobilities.iter().map(|mu| 0.005 * mu).collect(),
                ),
                column(
                    "hall_mobility_m2_per_Vs_unc_sys",
                    mobilities.iter().map(|mu| 0.01 * mu).collect(),
                ),
                column(
                    "hall_mobility_m2_per_Vs_unc",
                    mobilities.iter().map(|mu| 0.005f64.hypot(0.01) * mu).collect(),
                ),
                column("density_m3", vec![1e22; temperatures.len()]),
                column("density_m3_unc_sys", vec![0.03e22; temperatures.len()]),
            ],
        )
        .unwrap()
    }

    fn run(params: &str, hall: DataFrame) -> AnalysisOutput {
        let inputs = Inputs::from_tables([("hall".to_string(), hall)]);
        run_typed::<MobilityScatteringAnalysis>(params, &inputs, &Host::detached()).unwrap()
    }

    #[test]
    fn the_summary_carries_the_budget_and_the_fit_quality() {
        let output = run("{}", hall_table());
        let summary = &output.summary;
        for name in [
            "lattice_exponent",
            "lattice_mobility_300K_m2_per_Vs",
            "ionized_impurity_density_m3",
        ] {
            let total = summary[&format!("{name}_unc")].as_f64().unwrap();
            let statistical = summary[&format!("{name}_unc_stat")].as_f64().unwrap();
            let systematic = summary[&format!("{name}_unc_sys")].as_f64().unwrap();
            assert!((total - statistical.hypot(systematic)).abs() <= 1e-12 * total, "{name}");
        }
        // The 1 % field calibration is 1 % of mu_300 (the fit's linear response).
        let mu_300 = summary["lattice_mobility_300K_m2_per_Vs"].as_f64().unwrap();
        let systematic = summary["lattice_mobility_300K_m2_per_Vs_unc_sys"].as_f64().unwrap();
        assert!((systematic / mu_300 - 0.01).abs() < 1e-3, "{systematic}");
        assert_eq!(summary["weights_column"], json!("hall_mobility_m2_per_Vs_unc_stat"));
        assert_eq!(summary["temperature_uncertainty_used"], json!(true));
        assert_eq!(summary["calibrations_not_stated"], json!([]));
        assert_eq!(summary["floored_points"], json!(0));
        assert_eq!(summary["relative_uncertainty_floor"], json!(RELATIVE_UNCERTAINTY_FLOOR));
        let reduced = summary["reduced_chi_square"].as_f64().unwrap();
        assert!(reduced > 0.5 && reduced < 1.6, "{reduced}");
        assert!(summary["chi_square_p_value"].as_f64().unwrap() > 1e-3);
        assert_eq!(summary["birge_ratio"].as_f64().unwrap(), reduced.sqrt().max(1.0));
        assert!(output.warnings.is_empty(), "{:?}", output.warnings);
        let normalized = output
            .table
            .column("normalized_residual")
            .unwrap()
            .f64()
            .unwrap()
            .clone();
        assert!(normalized.iter().all(|value| value.is_some_and(f64::is_finite)));
    }

    #[test]
    fn an_old_table_is_taken_as_statistical_with_a_warning() {
        let hall = hall_table()
            .drop("hall_mobility_m2_per_Vs_unc_stat")
            .unwrap()
            .drop("hall_mobility_m2_per_Vs_unc_sys")
            .unwrap()
            .drop("density_m3_unc_sys")
            .unwrap();
        let output = run(r#"{"relative_uncertainty_floor": 0.02}"#, hall);
        assert_eq!(output.summary["weights_column"], json!("hall_mobility_m2_per_Vs_unc"));
        assert!(output.summary["lattice_exponent_unc_sys"].is_null());
        assert_eq!(
            output.summary["calibrations_not_stated"],
            json!([
                "mobility scale (field calibration)",
                "carrier-density scale (thickness, field, current and voltage calibrations)"
            ])
        );
        assert!(output
            .warnings
            .iter()
            .any(|warning| warning.contains("no calibration budget was given")));
        // A floor above every point's 1.1 % raises them all, and says so.
        assert_eq!(output.summary["floored_points"], json!(38));
        assert!(output
            .warnings
            .iter()
            .any(|warning| warning.contains("relative_uncertainty_floor")));
    }

    // The drift mobility of hall.reduce is the Hall mobility over one Hall factor per sample:
    // it takes the Hall mobility's relative budget when it has none of its own.
    #[test]
    fn the_drift_mobility_borrows_the_hall_budget() {
        let hall = hall_table();
        let drift: Vec<f64> = hall
            .column("hall_mobility_m2_per_Vs")
            .unwrap()
            .f64()
            .unwrap()
            .into_no_null_iter()
            .map(|mu| mu / 1.18)
            .collect();
        let mut with_drift = hall.clone();
        with_drift
            .with_column(Column::new("drift_mobility_m2_per_Vs".into(), drift))
            .unwrap();
        let drift_output = run(r#"{"mobility_column": "drift_mobility_m2_per_Vs"}"#, with_drift);
        let hall_output = run("{}", hall);
        assert_eq!(
            drift_output.summary["weights_column"],
            json!("hall_mobility_m2_per_Vs_unc_stat")
        );
        assert!(drift_output.warnings.is_empty(), "{:?}", drift_output.warnings);
        // Same relative errors: the same exponent and uncertainties; mu_300 1.18 times lower.
        for key in ["lattice_exponent", "lattice_exponent_unc", "lattice_exponent_unc_sys"] {
            let (a, b) = (
                drift_output.summary[key].as_f64().unwrap(),
                hall_output.summary[key].as_f64().unwrap(),
            );
            assert!((a - b).abs() <= 1e-6 * b.abs(), "{key}: {a} against {b}");
        }
        let ratio = hall_output.summary["lattice_mobility_300K_m2_per_Vs"].as_f64().unwrap()
            / drift_output.summary["lattice_mobility_300K_m2_per_Vs"]
                .as_f64()
                .unwrap();
        assert!((ratio - 1.18).abs() < 1e-5, "{ratio}");
    }

    #[test]
    fn a_floor_out_of_range_is_refused_by_name() {
        let inputs = Inputs::from_tables([("hall".to_string(), hall_table())]);
        let error = run_typed::<MobilityScatteringAnalysis>(
            r#"{"relative_uncertainty_floor": 1.0}"#,
            &inputs,
            &Host::detached(),
        )
        .unwrap_err();
        assert!(error.to_string().contains("relative_uncertainty_floor"), "{error}");
    }
}
