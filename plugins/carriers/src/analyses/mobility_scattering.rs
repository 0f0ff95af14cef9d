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
use crate::purity::DopantDensities;
use crate::scattering::{
    fit_mobility_scattering, medium_for, IonizedDensityModel, IonizedImpurityFormula, MobilityPoint,
    NeutralImpurityModel, ScatteringFit, ScatteringSettings, ScreeningDensity,
};
use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType, InputRole};
use mobilis_sdk::choices::CarrierChoice;
use mobilis_sdk::sdk::{Analysis, AnalysisOutput, Host, Inputs};
use serde::Serialize;

pub struct MobilityScatteringAnalysis;

/// Parameters of `carriers.mobility_scattering`.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct ScatteringParams {
    #[serde(flatten)]
    pub material: MaterialParams,
    /// force n or p; default: from the data's carrier_type column
    #[serde(default)]
    pub carrier_type: Option<CarrierChoice>,
    /// ionized-impurity scattering: screened (Brooks-Herring) or bare Coulomb with a cut-off
    /// (Conwell-Weisskopf)
    #[serde(default)]
    pub formula: IonizedImpurityFormula,
    /// constant: one N_I fitted; carriers_plus_compensation: N_I = n + 2 N_comp at each point
    /// with N_comp fitted (needs density_m3)
    #[serde(default)]
    pub ionized_density: IonizedDensityModel,
    /// neutral-impurity scattering (Erginsoy): none, a fitted constant density, or
    /// N_D - N_A - n from the freeze_out input
    #[serde(default)]
    pub neutral: NeutralChoice,
    /// fit a temperature-independent mobility term
    #[serde(default)]
    pub constant_term: bool,
    /// charge number Z of the ionized impurities
    #[serde(default = "ScatteringParams::charge_number")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub charge_number: f64,
    #[serde(flatten)]
    pub hall_factor: MobilityHallFactorParams,
    #[serde(flatten)]
    pub temperature_range: TemperatureRangeParams,
    /// hold the lattice exponent at this value instead of fitting it; not given: fitted
    #[serde(default)]
    #[schemars(range(min = 0))]
    pub fixed_lattice_exponent: Option<f64>,
    #[serde(flatten)]
    pub consistency: ConsistencyParams,
    /// which mobility of the hall table to fit: the Hall mobility, or the drift mobility
    /// hall.reduce derived with the sample sheet's Hall factor
    #[serde(default)]
    pub mobility_column: MobilityColumn,
    /// the smallest relative uncertainty a mobility keeps in the weights, so that no point
    /// can pin the fit
    #[serde(default = "relative_uncertainty_floor")]
    #[schemars(range(min = 0), extend("exclusiveMaximum" = 1))]
    pub relative_uncertainty_floor: f64,
}

impl ScatteringParams {
    /// The default of the physics settings, so that it is stated once.
    fn charge_number() -> f64 {
        ScatteringSettings::new(medium_for(&Material::silicon(), CarrierType::N)).charge_number
    }
}

/// `neutral`: the neutral-impurity term (Erginsoy). The physics' own choice carries the net
/// doping, which only the freeze_out input gives, so the parameter is a choice of its own.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum NeutralChoice {
    /// no neutral-impurity scattering
    #[default]
    None,
    /// one constant neutral density, fitted
    Fitted,
    /// N_D - N_A - n at each point, from the freeze_out input
    FromCarriers,
}

/// `mobility_column`: which mobility of the hall table is fitted.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
pub enum MobilityColumn {
    /// the Hall mobility
    #[default]
    #[serde(rename = "hall_mobility_m2_per_Vs")]
    Hall,
    /// the drift mobility hall.reduce derived with the sample sheet's Hall factor
    #[serde(rename = "drift_mobility_m2_per_Vs")]
    Drift,
}

impl MobilityColumn {
    /// The column name, as on the wire.
    pub fn name(self) -> &'static str {
        match self {
            MobilityColumn::Hall => "hall_mobility_m2_per_Vs",
            MobilityColumn::Drift => "drift_mobility_m2_per_Vs",
        }
    }
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
            ColumnSpec::new("dopant_density_m3", F64, Some("m^-3"), "majority dopant density"),
            ColumnSpec::new("dopant_density_m3_unc", F64, Some("m^-3"), "its uncertainty").optional(),
            ColumnSpec::new("compensating_density_m3", F64, Some("m^-3"), "compensating density"),
            ColumnSpec::new("compensating_density_m3_unc", F64, Some("m^-3"), "its uncertainty").optional(),
            ColumnSpec::new("dopant_compensating_covariance_m6", F64, None, "their covariance").optional(),
            ColumnSpec::new("carrier_type", Str, None, "n or p").optional(),
            ColumnSpec::new("sample", Str, None, "sample name").optional(),
            ColumnSpec::new(
                "material",
                Str,
                None,
                "the material preset of the fit (names candidate dopants)",
            )
            .optional(),
            ColumnSpec::new(
                "ionization_energy_eV",
                F64,
                Some("eV"),
                "the majority level's ionization energy",
            )
            .optional(),
            ColumnSpec::new("ionization_energy_eV_unc", F64, Some("eV"), "its uncertainty").optional(),
        ],
    }
}

/// One row of a freeze-out summary table: the row of `sample` when both tables name
/// samples, else the only row.
pub(crate) fn freeze_out_densities(
    table: &DataFrame,
    sample: Option<&str>,
) -> Result<(DopantDensities, Option<CarrierType>), AnalysisError> {
    let samples = sdk::optional_string_column(table, "sample")?;
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
    let value =
        |name: &str| -> Result<Option<f64>, AnalysisError> { Ok(sdk::optional_float_column(table, name)?[row]) };
    let densities = DopantDensities {
        dopant_density_m3: value("dopant_density_m3")?
            .ok_or_else(|| invalid("the freeze_out table's dopant_density_m3 is empty"))?,
        dopant_density_unc_m3: value("dopant_density_m3_unc")?,
        compensating_density_m3: value("compensating_density_m3")?
            .ok_or_else(|| invalid("the freeze_out table's compensating_density_m3 is empty"))?,
        compensating_density_unc_m3: value("compensating_density_m3_unc")?,
        covariance_m6: value("dopant_compensating_covariance_m6")?,
    };
    let carrier_type = table_carrier_type(
        sdk::optional_string_column(table, "carrier_type")?[row].as_deref(),
        "the freeze_out table",
    )?;
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
        let hall_values = sdk::optional_float_column(hall, HALL)?;
        let hall_part = sdk::optional_float_column(hall, &format!("{HALL}_{part}"))?;
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
        (
            sdk::optional_float_column(hall, &statistical)?,
            Some(statistical.clone()),
        )
    } else if carried_over && present(&format!("{HALL}_unc_stat")) {
        (from_hall("unc_stat")?, Some(format!("{HALL}_unc_stat")))
    } else if present(&total) {
        warnings.push(format!(
            "the hall table has {total} but no {statistical}: it was taken as statistical, and no calibration \
             budget was given (give the hall.reduce output, or the _unc_stat and _unc_sys columns)"
        ));
        (sdk::optional_float_column(hall, &total)?, Some(total.clone()))
    } else {
        (vec![None; hall.height()], None)
    };
    let calibration = if present(&systematic) {
        sdk::optional_float_column(hall, &systematic)?
    } else if carried_over && present(&format!("{HALL}_unc_sys")) {
        from_hall("unc_sys")?
    } else {
        vec![None; hall.height()]
    };
    Ok((weights, calibration, source))
}

/// The single sample named in a table, if it names one.
pub(crate) fn single_sample(table: &DataFrame) -> Result<Option<String>, AnalysisError> {
    let mut names: Vec<String> = sdk::optional_string_column(table, "sample")?
        .into_iter()
        .flatten()
        .collect();
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
        AnalysisDeclaration {
            name: String::new(),
            summary: "Lattice exponent and ionized-impurity density from mobility against temperature (Matthiessen's rule), compared with the freeze-out count".into(),
            description: "1/mu = 1/mu_L + 1/mu_I (+ 1/mu_N + 1/mu_C) with mu_L = mu_300 (T/300)^-alpha and Brooks-Herring or Conwell-Weisskopf ionized-impurity scattering, fitted in ln mu from several starts. Points are weighted by the mobility's statistical uncertainty (_unc_stat, floored at relative_uncertainty_floor) widened by temperature_K_unc through the model's slope (effective variance); calibration errors common to the series (_unc_sys of the mobility and of density_m3) are applied once after the fit, as _unc_sys of each result; the covariance is scaled by the Birge ratio when chi-square says the model misses the data. Given the freeze-out summary (role freeze_out), Brooks-Herring screening uses the compensated screening density and the fitted N_I is compared with the freeze-out densities: two independent counts of the same impurities (an upper limit when the mobility cannot determine N_I).".into(),
            inputs: vec![
                hall_role(vec![
                    ColumnSpec::new("hall_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "Hall mobility"),
                    ColumnSpec::new("hall_mobility_m2_per_Vs_unc", F64, Some("m2_per_Vs"), "its total uncertainty; weights the fit when the _stat column is absent").optional(),
                    ColumnSpec::new("hall_mobility_m2_per_Vs_unc_stat", F64, Some("m2_per_Vs"), "its statistical uncertainty; weights the fit").optional(),
                    ColumnSpec::new("hall_mobility_m2_per_Vs_unc_sys", F64, Some("m2_per_Vs"), "its calibration uncertainty common to the series; applied after the fit").optional(),
                    ColumnSpec::new("drift_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "drift mobility (mobility_column)").optional(),
                    ColumnSpec::new("drift_mobility_m2_per_Vs_unc", F64, Some("m2_per_Vs"), "its uncertainty").optional(),
                    ColumnSpec::new("drift_mobility_m2_per_Vs_unc_stat", F64, Some("m2_per_Vs"), "its statistical uncertainty").optional(),
                    ColumnSpec::new("drift_mobility_m2_per_Vs_unc_sys", F64, Some("m2_per_Vs"), "its calibration uncertainty").optional(),
                    ColumnSpec::new("density_m3", F64, Some("m^-3"), "carrier density (screening, comparison)").optional(),
                    ColumnSpec::new("density_m3_unc_sys", F64, Some("m^-3"), "its calibration uncertainty common to the series").optional(),
                    ColumnSpec::new("temperature_K_unc", F64, Some("K"), "standard uncertainty of the temperature; propagated through the model's slope").optional(),
                ]),
                freeze_out_role(false),
            ],
            outputs: vec![
                ColumnSpec::new("temperature_K", F64, Some("K"), "temperature"),
                ColumnSpec::new("in_fit_range", Bool, None, "the point was fitted"),
                ColumnSpec::new("mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "measured mobility after the Hall-factor correction"),
                ColumnSpec::new("mobility_m2_per_Vs_unc", F64, Some("m2_per_Vs"), "its uncertainty"),
                ColumnSpec::new("fitted_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "the model"),
                ColumnSpec::new("lattice_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "lattice term"),
                ColumnSpec::new("ionized_impurity_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "ionized-impurity term"),
                ColumnSpec::new("neutral_impurity_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "neutral-impurity term"),
                ColumnSpec::new("constant_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "temperature-independent term"),
                ColumnSpec::new("ionized_density_m3", F64, Some("m^-3"), "N_I at this point"),
                ColumnSpec::new("screening_density_m3", F64, Some("m^-3"), "Brooks-Herring screening density"),
                ColumnSpec::new("log_residual", F64, None, "ln(data) - ln(model)"),
                ColumnSpec::new("normalized_residual", F64, None, "the log residual over the uncertainty the fit weighted it by (floor and temperature included)"),
            ],
            summary_keys: vec![
                ColumnSpec::new("compensating_density_m3", ColumnType::F64, Some("m^-3"), "N_comp of the carriers-plus-compensation model, with _unc"),
                ColumnSpec::new("compensating_density_upper_limit_m3", ColumnType::F64, Some("m^-3"), "upper limit of N_comp when it is not resolved"),
                ColumnSpec::new("neutral_impurity_density_m3", ColumnType::F64, Some("m^-3"), "neutral impurity density when fitted, with _unc"),
                ColumnSpec::new("constant_mobility_m2_per_Vs", ColumnType::F64, Some("m2_per_Vs"), "the constant mobility term when fitted, with _unc"),
                ColumnSpec::new("carrier_type", ColumnType::Str, None, "n or p"),
                ColumnSpec::new("formula", ColumnType::Str, None, "ionized-impurity formula used"),
                ColumnSpec::new("lattice_exponent_fixed", ColumnType::Bool, None, "the lattice exponent was fixed, not fitted"),
                ColumnSpec::new("weighted", ColumnType::Bool, None, "the fit used the stated uncertainties"),
                ColumnSpec::new("weights_column", ColumnType::Str, None, "the column the weights came from"),
                ColumnSpec::new("calibrations_not_stated", ColumnType::Str, None, "list of the calibrations not stated (their defaults were assumed)"),
                ColumnSpec::new("degrees_of_freedom", ColumnType::I64, None, "points minus fitted parameters"),
                ColumnSpec::new("points_used", ColumnType::I64, None, "points fitted"),
                ColumnSpec::new("hall_factor", ColumnType::F64, None, "Hall scattering factor used"),
                ColumnSpec::new("mobility_column", ColumnType::Str, None, "the mobility column fitted"),
                ColumnSpec::new("relative_uncertainty_floor", ColumnType::F64, None, "the floor applied to relative uncertainties"),
                ColumnSpec::new("temperature_uncertainty_used", ColumnType::Bool, None, "temperature uncertainties entered the weights"),
                ColumnSpec::new("freeze_out_reference_m3", ColumnType::F64, Some("m^-3"), "the freeze-out fit's density compared with"),
                ColumnSpec::new("freeze_out_reference_basis", ColumnType::Str, None, "which freeze-out density was compared with"),
                ColumnSpec::new("density_ratio", ColumnType::F64, None, "N_I over the freeze-out reference, with _unc"),
                ColumnSpec::new("deviation_sigma", ColumnType::F64, None, "deviation from the freeze-out reference in standard uncertainties"),
                ColumnSpec::new("freeze_out_comparison", ColumnType::Str, None, "upper_limit when the comparison is a bound only"),
                ColumnSpec::new("lattice_exponent", F64, None, "alpha of mu_L ~ T^-alpha, with _unc, _unc_stat and _unc_sys"),
                ColumnSpec::new("lattice_mobility_300K_m2_per_Vs", F64, Some("m2_per_Vs"), "mu_L at 300 K, with _unc, _unc_stat and _unc_sys"),
                ColumnSpec::new("ionized_impurity_density_m3", F64, Some("m^-3"), "N_I, with _unc, _unc_stat and _unc_sys"),
                ColumnSpec::new("ionized_impurity_density_upper_limit_m3", F64, Some("m^-3"), "when the mobility does not determine N_I: the largest it allows"),
                ColumnSpec::new("freeze_out_consistent", Bool, None, "the scattering and freeze-out counts agree"),
                ColumnSpec::new("reduced_chi_square", F64, None, "chi^2 / nu"),
                ColumnSpec::new("chi_square_p_value", F64, None, "P(chi^2_nu >= chi^2) of a weighted fit"),
                ColumnSpec::new("birge_ratio", F64, None, "the factor the uncertainties were scaled by (1: not scaled)"),
                ColumnSpec::new("floored_points", I64, None, "points whose uncertainty was raised to relative_uncertainty_floor"),
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
        let mut output = OutputBuilder::of::<Self>();
        fit_table(&mut output, &fit);
        fill_summary(&mut output, &fit, &settings, carrier_type, &series, &mut warnings);
        output.warnings(warnings).warnings(fit.warnings.iter().cloned());
        host.progress(1.0, "done");
        output.finish(fit.rows.len())
    }
}

/// The series as read from the hall table: its points, the carrier types it states, and the
/// budget of its mobility column.
struct ScatteringSeries {
    points: Vec<MobilityPoint>,
    types: Vec<Option<String>>,
    mobility_column: &'static str,
    weight_column: Option<String>,
    mobility_scale_relative_unc: Option<f64>,
    density_scale_relative_unc: Option<f64>,
}

/// Reading: the points of the hall table with their uncertainties, and the common
/// calibration scales of the mobility and the density.
fn read_series(
    params: &ScatteringParams,
    hall: &DataFrame,
    warnings: &mut Vec<String>,
) -> Result<ScatteringSeries, AnalysisError> {
    let temperatures = sdk::float_column(hall, "temperature_K")?;
    let mobility_column = params.mobility_column.name();
    let mobilities = sdk::float_column(hall, mobility_column)?;
    // The fit weights by the statistical part; a table without one (not from hall.reduce,
    // or from an older version) has its total taken as statistical.
    let (uncertainties, mobility_systematic, weight_column) =
        mobility_budget(hall, mobility_column, &mobilities, warnings)?;
    let temperature_uncertainties = sdk::optional_float_column(hall, "temperature_K_unc")?;
    let densities = sdk::optional_float_column(hall, "density_m3")?;
    let density_systematic = sdk::optional_float_column(hall, "density_m3_unc_sys")?;
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
    let types = sdk::optional_string_column(hall, "carrier_type")?;
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
    Ok(match params.carrier_type {
        Some(forced) => forced.into(),
        None => {
            let mut seen: Vec<&str> = types
                .iter()
                .flatten()
                .map(String::as_str)
                .filter(|text| !text.is_empty())
                .collect();
            seen.sort();
            seen.dedup();
            match seen.as_slice() {
                [] => freeze_out.and_then(|(_, t)| *t).unwrap_or(CarrierType::N),
                [one] => table_carrier_type(Some(one), "the hall table")?.unwrap_or(CarrierType::N),
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
    let material = params.material.resolve()?;
    let mut settings = ScatteringSettings::new(medium_for(&material, carrier_type));
    settings.formula = params.formula;
    settings.ionized_density = params.ionized_density;
    let have_densities = points.iter().all(|p| p.carrier_density_m3.is_some());
    settings.screening = match (freeze_out, have_densities) {
        (Some((densities, _)), true) => ScreeningDensity::Compensated {
            dopant_density_m3: densities.dopant_density_m3,
            compensating_density_m3: densities.compensating_density_m3,
        },
        (_, true) => ScreeningDensity::MeasuredCarriers,
        (_, false) => ScreeningDensity::ImpurityDensity,
    };
    settings.neutral = match params.neutral {
        NeutralChoice::None => NeutralImpurityModel::None,
        NeutralChoice::Fitted => NeutralImpurityModel::FittedConstant,
        NeutralChoice::FromCarriers => match freeze_out {
            Some((densities, _)) => NeutralImpurityModel::FromCarrierDensity {
                net_doping_m3: densities.dopant_density_m3 - densities.compensating_density_m3,
            },
            None => {
                return Err(invalid(
                    "neutral: from_carriers needs the freeze_out input (the net doping)",
                ))
            }
        },
    };
    settings.constant_term = params.constant_term;
    settings.charge_number = params.charge_number;
    settings.hall_factor = params
        .hall_factor
        .setting()?
        .value()
        .map_err(|e| invalid(e.to_string()))?;
    let range = params.temperature_range.range()?;
    settings.temperature_min_k = range.map(|r| r.0);
    settings.temperature_max_k = range.and_then(|r| r.1.is_finite().then_some(r.1));
    settings.fixed_lattice_exponent = params.fixed_lattice_exponent;
    settings.tolerance = params.consistency.tolerance();
    settings.relative_uncertainty_floor = params.relative_uncertainty_floor;
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
fn fit_table(output: &mut OutputBuilder, fit: &ScatteringFit) {
    let rows = &fit.rows;
    let nullable = |get: fn(&crate::scattering::ScatteringRow) -> Option<f64>| -> Vec<Option<f64>> {
        rows.iter().map(get).collect()
    };
    output
        .f64("temperature_K", rows.iter().map(|r| r.temperature_k).collect())
        .bool("in_fit_range", rows.iter().map(|r| r.in_fit_range).collect())
        .f64("mobility_m2_per_Vs", rows.iter().map(|r| r.mobility_data).collect())
        .f64_nullable("mobility_m2_per_Vs_unc", nullable(|r| r.mobility_data_unc))
        .f64_nullable("fitted_mobility_m2_per_Vs", nullable(|r| r.mobility_fit))
        .f64_nullable("lattice_mobility_m2_per_Vs", nullable(|r| r.mobility_lattice))
        .f64_nullable("ionized_impurity_mobility_m2_per_Vs", nullable(|r| r.mobility_ionized))
        .f64_nullable("neutral_impurity_mobility_m2_per_Vs", nullable(|r| r.mobility_neutral))
        .f64_nullable("constant_mobility_m2_per_Vs", nullable(|r| r.mobility_constant))
        .f64_nullable("ionized_density_m3", nullable(|r| r.ionized_density_m3))
        .f64_nullable("screening_density_m3", nullable(|r| r.screening_density_m3))
        .f64_nullable("log_residual", nullable(|r| r.log_residual))
        .f64_nullable("normalized_residual", nullable(|r| r.normalized_residual));
}

/// The summary: the fitted parameters with their budgets, the fit quality, and the
/// comparison with the freeze-out count (a warning when they disagree).
fn fill_summary(
    output: &mut OutputBuilder,
    fit: &ScatteringFit,
    settings: &ScatteringSettings,
    carrier_type: CarrierType,
    series: &ScatteringSeries,
    warnings: &mut Vec<String>,
) {
    output
        .summary("carrier_type", carrier_type.as_str())
        .summary("formula", fit.formula.name());
    summary_estimate(
        output,
        "lattice_exponent",
        fit.lattice_exponent.value,
        fit.lattice_exponent.uncertainty,
    );
    output.summary("lattice_exponent_fixed", fit.lattice_exponent_fixed);
    summary_estimate(
        output,
        "lattice_mobility_300K_m2_per_Vs",
        fit.lattice_mobility_300k_m2_per_vs.value,
        fit.lattice_mobility_300k_m2_per_vs.uncertainty,
    );
    summary_estimate(
        output,
        "ionized_impurity_density_m3",
        fit.ionized_impurity_density_m3.value,
        fit.ionized_impurity_density_m3.uncertainty,
    );
    if let Some(limit) = fit.ionized_parameter_upper_limit_m3 {
        let name = match fit.ionized_density_model {
            IonizedDensityModel::Constant => "ionized_impurity_density_upper_limit_m3",
            IonizedDensityModel::CarriersPlusCompensation => "compensating_density_upper_limit_m3",
        };
        output.summary(name, limit);
    }
    if let Some(estimate) = fit.compensating_density_m3 {
        summary_estimate(output, "compensating_density_m3", estimate.value, estimate.uncertainty);
    }
    if let Some(estimate) = fit.neutral_impurity_density_m3 {
        summary_estimate(
            output,
            "neutral_impurity_density_m3",
            estimate.value,
            estimate.uncertainty,
        );
    }
    if let Some(estimate) = fit.constant_mobility_m2_per_vs {
        summary_estimate(
            output,
            "constant_mobility_m2_per_Vs",
            estimate.value,
            estimate.uncertainty,
        );
    }
    for (name, split) in &fit.budget {
        output
            .summary(&format!("{name}_unc_stat"), split.statistical)
            .summary(&format!("{name}_unc_sys"), split.systematic);
    }
    // Not-finite goodness values (an unweighted or exactly determined fit) are written null.
    let finite = |value: f64| value.is_finite().then_some(value);
    let goodness = &fit.goodness;
    output
        .summary("reduced_chi_square", finite(goodness.reduced_chi_square))
        .summary("chi_square_p_value", finite(goodness.p_value))
        .summary("birge_ratio", finite(goodness.birge_ratio))
        .summary("weighted", goodness.weighted)
        .summary("weights_column", &series.weight_column)
        .summary("floored_points", goodness.floored_points)
        .summary("relative_uncertainty_floor", settings.relative_uncertainty_floor)
        .summary("temperature_uncertainty_used", goodness.temperature_uncertainty_used)
        .summary("calibrations_not_stated", &fit.calibrations_not_stated)
        .summary("degrees_of_freedom", goodness.degrees_of_freedom)
        .summary("points_used", fit.points_used)
        .summary("hall_factor", fit.hall_factor)
        .summary("mobility_column", series.mobility_column);
    if let Some(comparison) = &fit.comparison {
        output
            .summary("freeze_out_reference_m3", comparison.reference.value)
            .summary("freeze_out_reference_basis", comparison.basis.name())
            .summary("density_ratio", comparison.ratio)
            .summary("density_ratio_unc", comparison.ratio_unc)
            .summary("deviation_sigma", comparison.deviation_sigma)
            .summary("freeze_out_consistent", comparison.consistent);
        if comparison.upper_limit_m3.is_some() {
            output.summary("freeze_out_comparison", "upper_limit");
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
    use mobilis_numerics::fit::RELATIVE_UNCERTAINTY_FLOOR;
    use mobilis_numerics::noise::Rng;
    use mobilis_sdk::sdk::run_typed;
    use serde_json::json;

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
