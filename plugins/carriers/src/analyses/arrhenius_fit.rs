//! `carriers.arrhenius`: table glue of [`crate::arrhenius`].
//!
//! The table's `ln_reduced_density_m3` and `ln_reduced_density_fit_m3` hold ln(n / m^-3) - r
//! ln(T / K) with r = 3/2 (`regime: compensated`, E = -slope) or 3/4 (`uncompensated`, E = -2
//! slope), shown by clients in cm^-3. The range is `temperature_min_K`..`temperature_max_K` or
//! the automatic low-temperature window of steady slope, reported either way. A common density
//! scale leaves the slope unchanged, so the energy has no systematic part: the summary gives
//! `activation_energy_eV_unc_stat` beside the total, with `chi_square`, `degrees_of_freedom`,
//! `reduced_chi_square`, `chi_square_p_value`, `birge_ratio`, `floored_points`,
//! `effective_variance_passes` and `weighted`. The slope is E only where n << N_A; expect a few
//! percent low otherwise (`carriers.freeze_out_fit` is exact).

use super::freeze_out_fit::{
    budget_columns, budget_schema_properties, budget_summary_keys, hall_factor_setting, hall_role,
    temperature_source_name,
};
use super::*;
use crate::arrhenius::{fit_arrhenius, ArrheniusRange, ArrheniusRegime, ArrheniusSettings, AutomaticRange};
use mobilis_sdk::abi::AnalysisDeclaration;
use mobilis_sdk::sdk::{Analysis, AnalysisOutput, Host, Inputs};

pub struct ArrheniusAnalysis;

#[derive(Debug, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ArrheniusParams {
    #[serde(default)]
    regime: Option<String>,
    #[serde(default)]
    carrier_type: Option<String>,
    #[serde(default)]
    hall_factor: Option<f64>,
    #[serde(default)]
    hall_factor_scattering_exponent: Option<f64>,
    #[serde(rename = "temperature_min_K", default)]
    temperature_min_k: Option<f64>,
    #[serde(rename = "temperature_max_K", default)]
    temperature_max_k: Option<f64>,
    #[serde(default)]
    plateau_fraction: Option<f64>,
    #[serde(default)]
    slope_spread: Option<f64>,
    #[serde(default)]
    min_points: Option<usize>,
    #[serde(default)]
    hall_factor_table: Option<Vec<[f64; 2]>>,
    #[serde(default)]
    relative_uncertainty_floor: Option<f64>,
    #[serde(rename = "temperature_uncertainty_K", default)]
    temperature_uncertainty_k: Option<f64>,
}

impl Analysis for ArrheniusAnalysis {
    const NAME: &'static str = "carriers.arrhenius";
    type Params = ArrheniusParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let defaults = AutomaticRange::default();
        let shared = material_schema_properties();
        let mut properties = serde_json::Map::new();
        for key in [
            "carrier_type",
            "hall_factor",
            "hall_factor_scattering_exponent",
            "temperature_min_K",
            "temperature_max_K",
        ] {
            properties.insert(key.into(), shared[key].clone());
        }
        properties.insert("regime".into(), json!({"type": "string", "enum": ["compensated", "uncompensated"], "default": "compensated", "description": "compensated: slope of ln(n T^-3/2) against 1/kT is -E; uncompensated (N_A << n << N_D): slope of ln(n T^-3/4) is -E/2 and 2 x slope is reported"}));
        properties.insert("plateau_fraction".into(), json!({"type": "number", "exclusiveMinimum": 0, "exclusiveMaximum": 1, "default": defaults.plateau_fraction, "description": "automatic range: points below this fraction of the largest density"}));
        properties.insert("slope_spread".into(), json!({"type": "number", "exclusiveMinimum": 0, "default": defaults.slope_spread, "description": "automatic range: largest relative spread of the local slopes"}));
        properties.insert("min_points".into(), json!({"type": "integer", "minimum": 3, "default": defaults.min_points, "description": "automatic range: fewest temperatures"}));
        budget_schema_properties(&mut properties);
        AnalysisDeclaration {
            name: String::new(),
            summary: "Activation energy from the slope of the Arrhenius plot of carrier density, over a given or an automatically chosen freeze-out range".into(),
            description: "Weighted straight line of ln(n T^-3/2) (or ln(n T^-3/4)) against 1/kT, weighted by the statistical density uncertainties (floored) and the temperature uncertainties through the line's slope (effective variance, iterated); the slope's error is scaled by the Birge ratio when chi-square says the errors fall short. Without temperature_min_K and temperature_max_K the range is the longest low-temperature window of steady negative local slope below the plateau; the range used is reported.".into(),
            params: json!({"type": "object", "additionalProperties": false, "properties": properties}),
            inputs: vec![hall_role(budget_columns())],
            outputs: vec![
                column("temperature_K", F64, Some("K"), "temperature"),
                column("inverse_thermal_energy_per_eV", F64, None, "1/kT, eV^-1 (the Arrhenius abscissa)"),
                column("ln_reduced_density_m3", F64, None, "ln(n / m^-3) - exponent ln(T / K) (SI; shown as ln_reduced_density_cm3, ln(n / cm^-3) - exponent ln(T / K), which is ln(1e6) less)"),
                column("ln_reduced_density_m3_unc", F64, None, "the standard uncertainty of the ordinate that weighted the point: u_stat(n)/n (floored) with the temperature's through the line's slope"),
                column("temperature_K_unc", F64, Some("K"), "the temperature's standard uncertainty as used"),
                column("hall_factor", F64, None, "the Hall factor in effect"),
                column("ln_reduced_density_fit_m3", F64, None, "the fitted line at this abscissa, as ln_reduced_density_m3"),
                column("used", Bool, None, "inside the range of the line"),
                column("temperature_exponent", F64, None, "r of ln(n T^-r): 1.5 (compensated) or 0.75 (uncompensated), so that a plot can name its ordinate"),
            ],
            summary_keys: {
                let mut keys = vec![
                    column("regime", ColumnType::Str, None, "the conduction regime the slope was read in"),
                    column("carrier_type", ColumnType::Str, None, "n or p"),
                    column("r_squared", ColumnType::F64, None, "coefficient of determination of the line"),
                    column("hall_factor", ColumnType::F64, None, "Hall scattering factor used"),
                    column("chi_square", ColumnType::F64, None, "chi-square of the line fit"),
                    column("degrees_of_freedom", ColumnType::I64, None, "points minus fitted parameters"),
                    column("effective_variance_passes", ColumnType::I64, None, "passes of the effective-variance weighting (temperature uncertainties)"),
                    column("weighted", ColumnType::Bool, None, "the fit used the stated uncertainties"),
                    column("relative_uncertainty_floor", ColumnType::F64, None, "the floor applied to relative uncertainties"),
                    column("activation_energy_eV", F64, Some("eV"), "with activation_energy_eV_unc and _unc_stat (the same: a density scale does not move the slope)"),
                    column("temperature_min_K", F64, Some("K"), "lowest temperature of the line"),
                    column("temperature_max_K", F64, Some("K"), "highest temperature of the line"),
                    column("points_used", I64, None, "points on the line"),
                    column("automatic_range", Bool, None, "the range was chosen from the data"),
                ];
                keys.extend(budget_summary_keys());
                keys
            },
            figures: crate::figures::arrhenius(),
            ..Default::default()
        }
    }

    fn run(params: ArrheniusParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let hall = inputs.required("hall")?;
        let mut warnings = Vec::new();
        let points = density_points(hall, &mut warnings)?;
        let regime = match params.regime.as_deref() {
            None | Some("compensated") => ArrheniusRegime::Compensated,
            Some("uncompensated") => ArrheniusRegime::Uncompensated,
            Some(other) => {
                return Err(invalid(format!(
                    "regime `{other}` is unknown; use compensated or uncompensated"
                )))
            }
        };
        let range = match (params.temperature_min_k, params.temperature_max_k) {
            (None, None) => {
                let defaults = AutomaticRange::default();
                ArrheniusRange::Automatic(AutomaticRange {
                    plateau_fraction: params.plateau_fraction.unwrap_or(defaults.plateau_fraction),
                    slope_spread: params.slope_spread.unwrap_or(defaults.slope_spread),
                    min_points: params.min_points.unwrap_or(defaults.min_points),
                })
            }
            (min, max) => {
                let (min_k, max_k) = temperature_range(min, max)?.expect("one bound given");
                ArrheniusRange::Temperatures { min_k, max_k }
            }
        };
        let settings = ArrheniusSettings {
            regime,
            range,
            carrier_type: parse_carrier_type(params.carrier_type.as_deref())?,
            hall_factor: hall_factor_setting(
                params.hall_factor,
                params.hall_factor_scattering_exponent,
                params.hall_factor_table.as_deref(),
            )?,
            relative_uncertainty_floor: params
                .relative_uncertainty_floor
                .unwrap_or(ArrheniusSettings::default().relative_uncertainty_floor),
            temperature_unc_k: params.temperature_uncertainty_k,
        };
        host.check_cancelled()?;
        let fit = fit_arrhenius(&points, &settings).map_err(|e| invalid(e.to_string()))?;
        let rows = fit.points.len();
        let table = frame(
            rows,
            vec![
                float_series(
                    "temperature_K",
                    fit.points.iter().map(|p| Some(p.temperature_k)).collect(),
                ),
                float_series(
                    "inverse_thermal_energy_per_eV",
                    fit.points
                        .iter()
                        .map(|p| Some(p.inverse_thermal_energy_per_ev))
                        .collect(),
                ),
                float_series(
                    "ln_reduced_density_m3",
                    fit.points.iter().map(|p| Some(p.reduced_ln_density)).collect(),
                ),
                float_series(
                    "ln_reduced_density_m3_unc",
                    fit.points.iter().map(|p| p.reduced_ln_density_unc).collect(),
                ),
                float_series(
                    "temperature_K_unc",
                    fit.points.iter().map(|p| Some(p.temperature_unc_k)).collect(),
                ),
                float_series("hall_factor", fit.points.iter().map(|p| Some(p.hall_factor)).collect()),
                float_series(
                    "ln_reduced_density_fit_m3",
                    fit.points
                        .iter()
                        .map(|p| Some(fit.line.evaluate(p.inverse_thermal_energy_per_ev)))
                        .collect(),
                ),
                Column::new("used".into(), fit.points.iter().map(|p| p.used).collect::<Vec<bool>>()),
                float_series(
                    "temperature_exponent",
                    vec![Some(fit.regime.temperature_exponent()); rows],
                ),
            ],
        )?;
        let mut output = AnalysisOutput::new(table);
        let summary = &mut output.summary;
        insert_estimate(
            summary,
            "activation_energy_eV",
            fit.activation_energy_ev,
            Some(fit.activation_energy_ev_unc),
        );
        summary.insert("regime".into(), json!(fit.regime.as_str()));
        summary.insert("carrier_type".into(), json!(fit.carrier_type.as_str()));
        summary.insert("temperature_min_K".into(), json!(fit.temperature_min_k));
        summary.insert("temperature_max_K".into(), json!(fit.temperature_max_k));
        summary.insert("points_used".into(), json!(fit.points_used));
        summary.insert("automatic_range".into(), json!(fit.automatic_range));
        summary.insert("r_squared".into(), json!(fit.line.r_squared));
        summary.insert(
            "activation_energy_eV_unc_stat".into(),
            json!(fit.activation_energy_ev_unc),
        );
        summary.insert("hall_factor".into(), json!(fit.hall_factor));
        summary.insert("chi_square".into(), json!(fit.line.chi_square));
        summary.insert("degrees_of_freedom".into(), json!(fit.line.degrees_of_freedom));
        summary.insert("reduced_chi_square".into(), json!(fit.line.reduced_chi_square));
        summary.insert("chi_square_p_value".into(), json!(fit.chi_square_p_value));
        summary.insert("birge_ratio".into(), json!(fit.birge_ratio));
        summary.insert("floored_points".into(), json!(fit.floored_points));
        summary.insert(
            "relative_uncertainty_floor".into(),
            json!(fit.relative_uncertainty_floor),
        );
        summary.insert("effective_variance_passes".into(), json!(fit.effective_variance_passes));
        summary.insert("weighted".into(), json!(fit.line.weighted));
        summary.insert(
            "temperature_uncertainty_source".into(),
            json!(temperature_source_name(fit.temperature_unc_source)),
        );
        warnings.extend(fit.warnings.iter().cloned());
        output.warnings = warnings;
        Ok(output)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_sdk::sdk::run_typed;

    /// The output names the power of T it divided out, per regime, on every row.
    #[test]
    fn output_carries_the_temperature_exponent_of_its_regime() {
        // n = 1e22 m^-3 * exp(-0.045 eV / kT) T^1.5: a donor freeze-out with a steady slope.
        let temperatures: Vec<f64> = (0..20).map(|k| 20.0 + 4.0 * k as f64).collect();
        let densities: Vec<f64> = temperatures
            .iter()
            .map(|t| 1e18 * t.powf(1.5) * (-0.045 / (8.617_333e-5 * t)).exp())
            .collect();
        let hall = DataFrame::new(
            temperatures.len(),
            vec![
                Column::new("temperature_K".into(), temperatures),
                Column::new("density_m3".into(), densities),
            ],
        )
        .unwrap();
        for (params, exponent) in [
            (
                r#"{"carrier_type": "n", "temperature_min_K": 20, "temperature_max_K": 60}"#,
                1.5,
            ),
            (
                r#"{"carrier_type": "n", "temperature_min_K": 20, "temperature_max_K": 60, "regime": "uncompensated"}"#,
                0.75,
            ),
        ] {
            let inputs = Inputs::from_tables([("hall".to_string(), hall.clone())]);
            let output = run_typed::<ArrheniusAnalysis>(params, &inputs, &Host::detached()).unwrap();
            let column = output
                .table
                .column("temperature_exponent")
                .unwrap()
                .f64()
                .unwrap()
                .clone();
            assert_eq!(column.len(), output.table.height());
            assert!(column.iter().all(|v| v == Some(exponent)), "{params}");
        }

        // Either bound alone leaves the other side open; the line then takes every point on
        // the given side, and the slope still returns the 45 meV the data were made with.
        for (params, expected_points) in [
            (r#"{"carrier_type": "n", "temperature_max_K": 60}"#, 11),
            (r#"{"carrier_type": "n", "temperature_min_K": 60}"#, 10),
        ] {
            let inputs = Inputs::from_tables([("hall".to_string(), hall.clone())]);
            let output = run_typed::<ArrheniusAnalysis>(params, &inputs, &Host::detached()).unwrap();
            assert_eq!(
                output.summary["points_used"], expected_points,
                "{params}: {:?}",
                output.summary
            );
            let energy = output.summary["activation_energy_eV"].as_f64().unwrap();
            assert!((energy - 0.045).abs() < 1e-6, "{params}: {energy}");
        }
        // A reversed range names the parameters to change.
        let inputs = Inputs::from_tables([("hall".to_string(), hall.clone())]);
        let error = run_typed::<ArrheniusAnalysis>(
            r#"{"carrier_type": "n", "temperature_min_K": 60, "temperature_max_K": 20}"#,
            &inputs,
            &Host::detached(),
        )
        .unwrap_err();
        assert!(error.to_string().contains("temperature_min_K"), "{error}");
    }
}

#[cfg(test)]
mod budget_tests {
    use super::*;
    use crate::freeze_out::realistic::{geometric, RealisticSeries};
    use mobilis_numerics::noise::Rng;
    use mobilis_sdk::sdk::run_typed;

    #[test]
    fn the_summary_carries_the_diagnostics_and_the_table_the_weights() {
        let series = RealisticSeries {
            temperatures_k: geometric(20.0, 30.0, 16),
            ..RealisticSeries::compensated_silicon()
        };
        let points = series.draw(&mut Rng::seeded(5)).points;
        let float = |f: &dyn Fn(&crate::freeze_out::DensityPoint) -> f64| points.iter().map(f).collect::<Vec<f64>>();
        let hall = DataFrame::new(
            points.len(),
            vec![
                Column::new("temperature_K".into(), float(&|p| p.temperature_k)),
                Column::new("density_m3".into(), float(&|p| p.density_m3)),
                Column::new("density_m3_unc_stat".into(), float(&|p| p.density_unc_m3.unwrap())),
                Column::new("density_m3_unc_sys".into(), float(&|p| p.density_unc_sys_m3.unwrap())),
                Column::new("temperature_K_unc".into(), float(&|p| p.temperature_unc_k.unwrap())),
                Column::new("carrier_type".into(), vec!["n"; points.len()]),
            ],
        )
        .unwrap();
        let inputs = Inputs::from_tables([("hall".to_string(), hall)]);
        let output = run_typed::<ArrheniusAnalysis>(
            r#"{"temperature_min_K": 1, "temperature_max_K": 100}"#,
            &inputs,
            &Host::detached(),
        )
        .unwrap();
        let summary = &output.summary;
        for key in [
            "activation_energy_eV_unc",
            "activation_energy_eV_unc_stat",
            "reduced_chi_square",
            "chi_square_p_value",
            "birge_ratio",
        ] {
            assert!(summary[key].as_f64().is_some(), "{key}: {:?}", summary[key]);
        }
        assert_eq!(summary["temperature_uncertainty_source"], "temperature_K_unc");
        assert_eq!(summary["weighted"], json!(true));
        let energy = summary["activation_energy_eV"].as_f64().unwrap();
        let unc = summary["activation_energy_eV_unc"].as_f64().unwrap();
        assert!((energy - 0.0452).abs() < 4.0 * unc, "{energy} +- {unc}");
        for column in ["temperature_K_unc", "hall_factor", "ln_reduced_density_m3_unc"] {
            assert!(output.table.column(column).is_ok(), "{column}");
        }
    }
}
