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

use super::freeze_out_fit::{budget_columns, budget_summary_keys, hall_role, temperature_source_name};
use super::*;
use crate::arrhenius::{fit_arrhenius, ArrheniusRange, ArrheniusRegime, ArrheniusSettings, AutomaticRange};
use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType};
use mobilis_sdk::choices::CarrierChoice;
use mobilis_sdk::sdk::{Analysis, AnalysisOutput, Host, Inputs};

pub struct ArrheniusAnalysis;

/// Parameters of `carriers.arrhenius`.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct ArrheniusParams {
    /// compensated: slope of ln(n T^-3/2) against 1/kT is -E; uncompensated (N_A << n <<
    /// N_D): slope of ln(n T^-3/4) is -E/2 and 2 x slope is reported
    #[serde(default = "ArrheniusParams::regime")]
    pub regime: ArrheniusRegime,
    /// force n or p; default: from the data's carrier_type column
    #[serde(default)]
    pub carrier_type: Option<CarrierChoice>,
    // The range of the line; without either bound it is chosen from the data.
    #[serde(flatten)]
    pub temperature_range: TemperatureRangeParams,
    /// automatic range: points below this fraction of the largest density
    #[serde(default = "ArrheniusParams::plateau_fraction")]
    #[schemars(extend("exclusiveMinimum" = 0, "exclusiveMaximum" = 1))]
    pub plateau_fraction: f64,
    /// automatic range: largest relative spread of the local slopes
    #[serde(default = "ArrheniusParams::slope_spread")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub slope_spread: f64,
    /// automatic range: fewest temperatures
    #[serde(default = "ArrheniusParams::min_points")]
    #[schemars(range(min = 3))]
    pub min_points: usize,
    #[serde(flatten)]
    pub budget: BudgetParams,
}

/// The defaults are those of [`ArrheniusSettings`] and [`AutomaticRange`], so they are
/// stated once.
impl ArrheniusParams {
    fn regime() -> ArrheniusRegime {
        ArrheniusSettings::default().regime
    }
    fn plateau_fraction() -> f64 {
        AutomaticRange::default().plateau_fraction
    }
    fn slope_spread() -> f64 {
        AutomaticRange::default().slope_spread
    }
    fn min_points() -> usize {
        AutomaticRange::default().min_points
    }
}

impl Analysis for ArrheniusAnalysis {
    const NAME: &'static str = "carriers.arrhenius";
    type Params = ArrheniusParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Activation energy from the slope of the Arrhenius plot of carrier density, over a given or an automatically chosen freeze-out range".into(),
            description: "Weighted straight line of ln(n T^-3/2) (or ln(n T^-3/4)) against 1/kT, weighted by the statistical density uncertainties (floored) and the temperature uncertainties through the line's slope (effective variance, iterated); the slope's error is scaled by the Birge ratio when chi-square says the errors fall short. Without temperature_min_K and temperature_max_K the range is the longest low-temperature window of steady negative local slope below the plateau; the range used is reported.".into(),
            inputs: vec![hall_role(budget_columns())],
            outputs: vec![
                ColumnSpec::new("temperature_K", F64, Some("K"), "temperature"),
                ColumnSpec::new("inverse_thermal_energy_per_eV", F64, None, "1/kT, eV^-1 (the Arrhenius abscissa)"),
                ColumnSpec::new("ln_reduced_density_m3", F64, None, "ln(n / m^-3) - exponent ln(T / K) (SI; shown as ln_reduced_density_cm3, ln(n / cm^-3) - exponent ln(T / K), which is ln(1e6) less)"),
                ColumnSpec::new("ln_reduced_density_m3_unc", F64, None, "the standard uncertainty of the ordinate that weighted the point: u_stat(n)/n (floored) with the temperature's through the line's slope"),
                ColumnSpec::new("temperature_K_unc", F64, Some("K"), "the temperature's standard uncertainty as used"),
                ColumnSpec::new("hall_factor", F64, None, "the Hall factor in effect"),
                ColumnSpec::new("ln_reduced_density_fit_m3", F64, None, "the fitted line at this abscissa, as ln_reduced_density_m3"),
                ColumnSpec::new("used", Bool, None, "inside the range of the line"),
                ColumnSpec::new("temperature_exponent", F64, None, "r of ln(n T^-r): 1.5 (compensated) or 0.75 (uncompensated), so that a plot can name its ordinate"),
            ],
            summary_keys: {
                let mut keys = vec![
                    ColumnSpec::new("regime", ColumnType::Str, None, "the conduction regime the slope was read in"),
                    ColumnSpec::new("carrier_type", ColumnType::Str, None, "n or p"),
                    ColumnSpec::new("r_squared", ColumnType::F64, None, "coefficient of determination of the line"),
                    ColumnSpec::new("hall_factor", ColumnType::F64, None, "Hall scattering factor used"),
                    ColumnSpec::new("chi_square", ColumnType::F64, None, "chi-square of the line fit"),
                    ColumnSpec::new("degrees_of_freedom", ColumnType::I64, None, "points minus fitted parameters"),
                    ColumnSpec::new("effective_variance_passes", ColumnType::I64, None, "passes of the effective-variance weighting (temperature uncertainties)"),
                    ColumnSpec::new("weighted", ColumnType::Bool, None, "the fit used the stated uncertainties"),
                    ColumnSpec::new("relative_uncertainty_floor", ColumnType::F64, None, "the floor applied to relative uncertainties"),
                    ColumnSpec::new("activation_energy_eV", F64, Some("eV"), "with activation_energy_eV_unc and _unc_stat (the same: a density scale does not move the slope)"),
                    ColumnSpec::new("temperature_min_K", F64, Some("K"), "lowest temperature of the line"),
                    ColumnSpec::new("temperature_max_K", F64, Some("K"), "highest temperature of the line"),
                    ColumnSpec::new("points_used", I64, None, "points on the line"),
                    ColumnSpec::new("automatic_range", Bool, None, "the range was chosen from the data"),
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
        let range = match params.temperature_range.range()? {
            None => ArrheniusRange::Automatic(AutomaticRange {
                plateau_fraction: params.plateau_fraction,
                slope_spread: params.slope_spread,
                min_points: params.min_points,
            }),
            Some((min_k, max_k)) => ArrheniusRange::Temperatures { min_k, max_k },
        };
        let settings = ArrheniusSettings {
            regime: params.regime,
            range,
            carrier_type: params.carrier_type.map(CarrierType::from),
            hall_factor: params.budget.hall_factor.setting()?,
            relative_uncertainty_floor: params.budget.relative_uncertainty_floor,
            temperature_unc_k: params.budget.temperature_uncertainty_k,
        };
        host.check_cancelled()?;
        let fit = fit_arrhenius(&points, &settings).map_err(|e| invalid(e.to_string()))?;
        let rows = fit.points.len();
        let points = &fit.points;
        let mut output = OutputBuilder::of::<Self>();
        output
            .f64("temperature_K", points.iter().map(|p| p.temperature_k).collect())
            .f64(
                "inverse_thermal_energy_per_eV",
                points.iter().map(|p| p.inverse_thermal_energy_per_ev).collect(),
            )
            .f64(
                "ln_reduced_density_m3",
                points.iter().map(|p| p.reduced_ln_density).collect(),
            )
            .f64_nullable(
                "ln_reduced_density_m3_unc",
                points.iter().map(|p| p.reduced_ln_density_unc).collect(),
            )
            .f64(
                "temperature_K_unc",
                points.iter().map(|p| p.temperature_unc_k).collect(),
            )
            .f64("hall_factor", points.iter().map(|p| p.hall_factor).collect())
            .f64(
                "ln_reduced_density_fit_m3",
                points
                    .iter()
                    .map(|p| fit.line.evaluate(p.inverse_thermal_energy_per_ev))
                    .collect(),
            )
            .bool("used", points.iter().map(|p| p.used).collect())
            .f64("temperature_exponent", vec![fit.regime.temperature_exponent(); rows]);
        summary_estimate(
            &mut output,
            "activation_energy_eV",
            fit.activation_energy_ev,
            Some(fit.activation_energy_ev_unc),
        );
        output
            .summary("regime", fit.regime.as_str())
            .summary("carrier_type", fit.carrier_type.as_str())
            .summary("temperature_min_K", fit.temperature_min_k)
            .summary("temperature_max_K", fit.temperature_max_k)
            .summary("points_used", fit.points_used)
            .summary("automatic_range", fit.automatic_range)
            .summary("r_squared", fit.line.r_squared)
            .summary("activation_energy_eV_unc_stat", fit.activation_energy_ev_unc)
            .summary("hall_factor", fit.hall_factor)
            .summary("chi_square", fit.line.chi_square)
            .summary("degrees_of_freedom", fit.line.degrees_of_freedom)
            .summary(
                "reduced_chi_square",
                Some(fit.line.reduced_chi_square).filter(|_| fit.line.weighted),
            )
            .summary("chi_square_p_value", fit.chi_square_p_value)
            .summary("birge_ratio", fit.birge_ratio)
            .summary("floored_points", fit.floored_points)
            .summary("relative_uncertainty_floor", fit.relative_uncertainty_floor)
            .summary("effective_variance_passes", fit.effective_variance_passes)
            .summary("weighted", fit.line.weighted)
            .summary(
                "temperature_uncertainty_source",
                temperature_source_name(fit.temperature_unc_source),
            )
            .warnings(warnings)
            .warnings(fit.warnings.iter().cloned());
        output.finish(rows)
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
    use serde_json::json;

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
