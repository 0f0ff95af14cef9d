//! `carriers.freeze_out_fit`: table glue of [`crate::freeze_out`], and the parts of the
//! uncertainty budget (input columns, parameters, summary keys) that `carriers.arrhenius`
//! shares with it.
//!
//! Summary: `dopant_density_m3`, `compensating_density_m3`, `net_density_m3`,
//! `compensation_ratio` and `ionization_energy_eV`, each with `_unc`, `_unc_stat` and
//! `_unc_sys`; their covariance `dopant_compensating_covariance_m6`;
//! `density_scale_relative_uncertainty` and its source; `reduced_chi_square`,
//! `chi_square_p_value`, `birge_ratio`, `floored_points`, `effective_variance_passes`;
//! `hall_factor` (null when it varies with temperature) and `uncertainties_not_given`. The
//! common density scale (the largest `density_m3_unc_sys / density_m3` of the series, with a
//! warning when the rows differ by more than 10 %) moves N_D - N_A nearly in full, N_A little,
//! and E_D a little through the bend between saturation and freeze-out (about 0.24 meV for 3 %
//! on a realistic silicon series, against 0.045 meV statistical). The table's `kind` is `data`
//! (a measured point, with its residual) or `curve` (the fitted model). `effective_dos_300K_m3`
//! replaces the majority band's Nc (or Nv); `degeneracy` defaults to 2 for donors and 4 for
//! acceptors.

use super::*;
use crate::freeze_out::{fit_freeze_out, Estimate, FreezeOutSettings, UncertaintySource};
use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType, InputRole};
use mobilis_sdk::choices::CarrierChoice;
use mobilis_sdk::sdk::{Analysis, AnalysisOutput, Host, Inputs};

pub struct FreezeOutFitAnalysis;

/// Parameters of `carriers.freeze_out_fit`.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct FreezeOutParams {
    #[serde(flatten)]
    pub material: MaterialParams,
    /// force n or p; default: from the data's carrier_type column
    #[serde(default)]
    pub carrier_type: Option<CarrierChoice>,
    /// replaces the majority band's effective density of states at 300 K (Nc for n-type, Nv
    /// for p-type), scaled as T^1.5; not given: the material's
    #[serde(rename = "effective_dos_300K_m3", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub effective_dos_300k_m3: Option<f64>,
    /// degeneracy factor of the majority level; default 2 for donors, 4 for acceptors
    #[serde(default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub degeneracy: Option<f64>,
    #[serde(flatten)]
    pub temperature_range: TemperatureRangeParams,
    /// bounds of the fitted ionization energy, eV
    #[serde(
        rename = "ionization_energy_bounds_eV",
        default = "FreezeOutParams::ionization_energy_bounds"
    )]
    #[schemars(extend("items" = {"type": "number", "exclusiveMinimum": 0}))]
    pub ionization_energy_bounds_ev: [f64; 2],
    /// bounds of N_comp / N_maj
    #[serde(default = "FreezeOutParams::compensation_bounds")]
    #[schemars(extend("items" = {"type": "number", "exclusiveMinimum": 0, "exclusiveMaximum": 1}))]
    pub compensation_bounds: [f64; 2],
    /// points of the fitted curve
    #[serde(default = "FreezeOutParams::curve_points")]
    #[schemars(range(min = 2, max = 100000))]
    pub curve_points: usize,
    #[serde(flatten)]
    pub budget: BudgetParams,
    /// relative standard uncertainty of a scale common to every density (thickness, current,
    /// voltage, field calibrations) when the table has no density_m3_unc_sys, e.g. 0.03 for
    /// 3 %; applied once to N_D, N_A and the net density after the fit; default: not given (0)
    #[serde(default)]
    #[schemars(range(min = 0), extend("exclusiveMaximum" = 1))]
    pub density_scale_relative_uncertainty: Option<f64>,
}

/// The defaults are those of [`FreezeOutSettings`], so they are stated once.
impl FreezeOutParams {
    fn ionization_energy_bounds() -> [f64; 2] {
        let (low, high) = FreezeOutSettings::default().ionization_energy_bounds_ev;
        [low, high]
    }
    fn compensation_bounds() -> [f64; 2] {
        let (low, high) = FreezeOutSettings::default().compensation_bounds;
        [low, high]
    }
    fn curve_points() -> usize {
        FreezeOutSettings::default().curve_points
    }
}

/// The input columns of the uncertainty budget, beside `density_m3`.
pub(crate) fn budget_columns() -> Vec<ColumnSpec> {
    use ColumnType::*;
    vec![
        ColumnSpec::new("density_m3", F64, Some("m^-3"), "majority carrier density"),
        ColumnSpec::new("density_m3_unc_stat", F64, Some("m^-3"), "its statistical standard uncertainty (from the scatter of the readings); weights the fit").optional(),
        ColumnSpec::new("density_m3_unc_sys", F64, Some("m^-3"), "its systematic standard uncertainty common to the whole series (thickness, current, voltage, field calibrations); applied once after the fit as a scale").optional(),
        ColumnSpec::new("density_m3_unc", F64, Some("m^-3"), "total standard uncertainty; used as statistical only when density_m3_unc_stat is absent (an older table)").optional(),
        ColumnSpec::new("temperature_K_unc", F64, Some("K"), "standard uncertainty of the sample temperature (readings' spread and thermometer accuracy); propagated through the slope of the model").optional(),
        ColumnSpec::new("hall_factor", F64, None, "the Hall factor already applied to density_m3 (default 1); replaced when a Hall factor parameter is given").optional(),
    ]
}

/// The summary keys of the uncertainty budget shared by the temperature-series fits.
pub(crate) fn budget_summary_keys() -> Vec<ColumnSpec> {
    use ColumnType::*;
    vec![
        ColumnSpec::new("reduced_chi_square", F64, None, "chi-square per degree of freedom (weighted fits; without stated uncertainties the residuals set the noise scale and it tests nothing)"),
        ColumnSpec::new("chi_square_p_value", F64, None, "probability of a chi-square at least this large if the model and the weights are right (weighted fits)"),
        ColumnSpec::new("birge_ratio", F64, None, "factor the statistical uncertainties were multiplied by: sqrt(reduced chi-square) when above 1, else 1 (weighted fits)"),
        ColumnSpec::new("floored_points", I64, None, "points whose relative uncertainty was raised to relative_uncertainty_floor"),
        ColumnSpec::new("temperature_uncertainty_source", Str, None, "temperature_K_unc, temperature_uncertainty_K or not given"),
    ]
}

/// What the source of the temperature uncertainties is called in a summary.
pub(crate) fn temperature_source_name(source: UncertaintySource) -> &'static str {
    match source {
        UncertaintySource::Points => "temperature_K_unc",
        UncertaintySource::Stated => "temperature_uncertainty_K",
        UncertaintySource::NotGiven => "not given",
    }
}

/// Inserts `name`, `name_unc`, `name_unc_stat` and `name_unc_sys`.
fn summary_budget(output: &mut OutputBuilder, name: &str, estimate: &Estimate) {
    summary_estimate(output, name, estimate.value, estimate.unc);
    output
        .summary(&format!("{name}_unc_stat"), estimate.unc_stat)
        .summary(&format!("{name}_unc_sys"), estimate.unc_sys);
}

/// The `hall` input role shared by the carriers analyses that read a temperature series.
pub(crate) fn hall_role(extra: Vec<ColumnSpec>) -> InputRole {
    use ColumnType::*;
    let mut columns = vec![
        ColumnSpec::new("temperature_K", F64, Some("K"), "temperature of the point"),
        ColumnSpec::new(
            "carrier_type",
            Str,
            None,
            "n or p, from the sign of the Hall coefficient",
        )
        .optional(),
        ColumnSpec::new("sample", Str, None, "sample name (group by it for several samples)").optional(),
    ];
    columns.extend(extra);
    InputRole {
        role: "hall".into(),
        required: true,
        description: "a temperature series of one sample: the output of hall.reduce, or any table with these columns"
            .into(),
        columns,
    }
}

impl Analysis for FreezeOutFitAnalysis {
    const NAME: &'static str = "carriers.freeze_out_fit";
    type Params = FreezeOutParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Majority and compensating dopant densities and the ionization energy from carrier density against temperature (charge neutrality of a compensated semiconductor)".into(),
            description: "Fits ln n(T) with the exact charge-neutrality equation p + N_D+ = n + N_A- (mirrored for p-type): Boltzmann bands with Nc, Nv ~ T^1.5, the majority level with its degeneracy factor, fully ionized compensating centres, and the intrinsic carriers of the Varshni band gap at high temperature. Bounded Levenberg-Marquardt from many starts (derived from the data and a grid over compensation and energy), so the result does not depend on a guess. Weighted by the statistical density uncertainties (floored) and the temperature uncertainties through the model's slope (effective variance, iterated); the covariance is scaled by the Birge ratio when chi-square says the errors fall short; the common density scale (density_m3_unc_sys) is applied once to the densities after the fit. A parameter on a bound gets no uncertainty.".into(),
            inputs: vec![hall_role(budget_columns())],
            outputs: vec![
                ColumnSpec::new("kind", Str, None, "data (a measured point) or curve (the fitted model)"),
                ColumnSpec::new("temperature_K", F64, Some("K"), "temperature"),
                ColumnSpec::new("temperature_K_unc", F64, Some("K"), "its standard uncertainty as used (data rows)"),
                ColumnSpec::new("density_m3", F64, Some("m^-3"), "measured density after the Hall-factor correction (data rows)"),
                ColumnSpec::new("density_m3_unc", F64, Some("m^-3"), "the uncertainty that weighted the point: statistical (floored) and the temperature's through the model's slope, before Birge scaling; the common scale is not in it (data rows of weighted fits)"),
                ColumnSpec::new("density_m3_unc_stat", F64, Some("m^-3"), "the statistical uncertainty as given, after the Hall-factor correction (data rows)"),
                ColumnSpec::new("hall_factor", F64, None, "the Hall factor in effect (data rows)"),
                ColumnSpec::new("fitted_density_m3", F64, Some("m^-3"), "the fitted model"),
                ColumnSpec::new("log_residual", F64, None, "ln(model) - ln(data) (data rows)"),
                ColumnSpec::new("normalized_residual", F64, None, "the residual over the relative uncertainty that weighted the point (data rows of weighted fits)"),
            ],
            summary_keys: {
                let mut keys = vec![
                    ColumnSpec::new("material", ColumnType::Str, None, "material whose constants were used"),
                    ColumnSpec::new("uncertainties_not_given", ColumnType::Str, None, "list of the uncertainty contributions not stated (left out of the budget)"),
                    ColumnSpec::new("degeneracy", ColumnType::F64, None, "ground-state degeneracy factor of the dopant"),
                    ColumnSpec::new("hall_factor", ColumnType::F64, None, "Hall scattering factor used"),
                    ColumnSpec::new("chi_square", ColumnType::F64, None, "chi-square of the fit"),
                    ColumnSpec::new("degrees_of_freedom", ColumnType::I64, None, "points minus fitted parameters"),
                    ColumnSpec::new("effective_variance_passes", ColumnType::I64, None, "passes of the effective-variance weighting (temperature uncertainties)"),
                    ColumnSpec::new("weighted", ColumnType::Bool, None, "the fit used the stated uncertainties"),
                    ColumnSpec::new("points", ColumnType::I64, None, "points fitted"),
                    ColumnSpec::new("at_bound", ColumnType::Str, None, "list of the parameters that ended at a bound"),
                    ColumnSpec::new("starts", ColumnType::I64, None, "fit starts tried"),
                    ColumnSpec::new("starts_converged", ColumnType::I64, None, "fit starts that converged"),
                    ColumnSpec::new("relative_uncertainty_floor", ColumnType::F64, None, "the floor applied to relative uncertainties"),
                    ColumnSpec::new("carrier_type", Str, None, "n or p"),
                    ColumnSpec::new("dopant_density_m3", F64, Some("m^-3"), "majority dopant density (donors for n-type), with _unc (total), _unc_stat and _unc_sys"),
                    ColumnSpec::new("compensating_density_m3", F64, Some("m^-3"), "compensating density (acceptors for n-type), with _unc, _unc_stat and _unc_sys"),
                    ColumnSpec::new("net_density_m3", F64, Some("m^-3"), "dopant minus compensating, with _unc, _unc_stat and _unc_sys"),
                    ColumnSpec::new("compensation_ratio", F64, None, "compensating / dopant, with _unc, _unc_stat and _unc_sys"),
                    ColumnSpec::new("ionization_energy_eV", F64, Some("eV"), "majority level below its band edge, with _unc, _unc_stat and _unc_sys (what the common density scale moves it by through the fit: small, from the bend between saturation and freeze-out)"),
                    ColumnSpec::new("dopant_compensating_covariance_m6", F64, None, "total covariance of the two densities (the common scale included)"),
                    ColumnSpec::new("density_scale_relative_uncertainty", F64, None, "the common relative scale uncertainty applied to the densities (0 when not given)"),
                    ColumnSpec::new("density_scale_source", Str, None, "density_m3_unc_sys (largest of the rows), density_scale_relative_uncertainty or not given"),
                ];
                keys.extend(budget_summary_keys());
                keys
            },
            figures: crate::figures::freeze_out(),
            ..Default::default()
        }
    }

    fn run(params: FreezeOutParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let hall = inputs.required("hall")?;
        let mut warnings = Vec::new();
        let points = density_points(hall, &mut warnings)?;
        let mut settings = FreezeOutSettings::for_material(params.material.resolve()?);
        settings.carrier_type = params.carrier_type.map(CarrierType::from);
        settings.effective_dos_300k_m3 = params.effective_dos_300k_m3;
        settings.degeneracy = params.degeneracy;
        settings.hall_factor = params.budget.hall_factor.setting()?;
        settings.relative_uncertainty_floor = params.budget.relative_uncertainty_floor;
        settings.temperature_unc_k = params.budget.temperature_uncertainty_k;
        settings.density_scale_relative_unc = params.density_scale_relative_uncertainty;
        settings.temperature_range_k = params.temperature_range.range()?;
        let [low, high] = params.ionization_energy_bounds_ev;
        settings.ionization_energy_bounds_ev = (low, high);
        let [low, high] = params.compensation_bounds;
        settings.compensation_bounds = (low, high);
        settings.curve_points = params.curve_points;
        host.progress(0.1, "fitting");
        host.check_cancelled()?;
        let fit = fit_freeze_out(&points, &settings).map_err(|error| match error {
            crate::freeze_out::FreezeOutError::Fit(_) | crate::freeze_out::FreezeOutError::Undetermined { .. } => {
                AnalysisError::Numerical(error.to_string())
            }
            other => invalid(other.to_string()),
        })?;
        host.progress(0.9, "writing the table");

        let data_rows = fit.points.len();
        let rows = data_rows + fit.curve.len();
        let mut kind = Vec::with_capacity(rows);
        let (mut temperature, mut temperature_unc) = (Vec::new(), Vec::new());
        let (mut density, mut density_unc, mut density_unc_stat) = (Vec::new(), Vec::new(), Vec::new());
        let (mut hall_factors, mut fitted, mut residual, mut normalized) =
            (Vec::new(), Vec::new(), Vec::new(), Vec::new());
        for point in &fit.points {
            kind.push("data");
            temperature.push(Some(point.temperature_k));
            temperature_unc.push(Some(point.temperature_unc_k));
            density.push(Some(point.density_m3));
            density_unc.push(point.effective_relative_unc.map(|relative| relative * point.density_m3));
            density_unc_stat.push(point.density_unc_m3);
            hall_factors.push(Some(point.hall_factor));
            fitted.push(Some(point.model_density_m3));
            residual.push(Some(point.residual_ln));
            normalized.push(point.normalized_residual);
        }
        for point in &fit.curve {
            kind.push("curve");
            temperature.push(Some(point.temperature_k));
            fitted.push(Some(point.density_m3));
        }
        for column in [
            &mut temperature_unc,
            &mut density,
            &mut density_unc,
            &mut density_unc_stat,
            &mut hall_factors,
            &mut residual,
            &mut normalized,
        ] {
            column.resize(rows, None);
        }
        let mut output = OutputBuilder::of::<Self>();
        output
            .str("kind", &kind)
            .f64_nullable("temperature_K", temperature)
            .f64_nullable("temperature_K_unc", temperature_unc)
            .f64_nullable("density_m3", density)
            .f64_nullable("density_m3_unc", density_unc)
            .f64_nullable("density_m3_unc_stat", density_unc_stat)
            .f64_nullable("hall_factor", hall_factors)
            .f64_nullable("fitted_density_m3", fitted)
            .f64_nullable("log_residual", residual)
            .f64_nullable("normalized_residual", normalized);
        output
            .summary("carrier_type", fit.carrier_type.as_str())
            .summary("material", params.material.material.name());
        summary_budget(&mut output, "dopant_density_m3", &fit.dopant);
        summary_budget(&mut output, "compensating_density_m3", &fit.compensating);
        summary_budget(&mut output, "net_density_m3", &fit.net);
        summary_budget(&mut output, "compensation_ratio", &fit.ratio);
        summary_budget(&mut output, "ionization_energy_eV", &fit.energy);
        let both = fit.dopant_density_m3_unc.is_some() && fit.compensating_density_m3_unc.is_some();
        let mut not_given = Vec::new();
        if fit.density_scale_source == UncertaintySource::NotGiven {
            not_given.push("density scale (density_m3_unc_sys or density_scale_relative_uncertainty)");
        }
        if fit.temperature_unc_source == UncertaintySource::NotGiven {
            not_given.push("temperature (temperature_K_unc or temperature_uncertainty_K)");
        }
        output
            .summary(
                "dopant_compensating_covariance_m6",
                both.then_some(fit.covariance[0][1]),
            )
            .summary("density_scale_relative_uncertainty", fit.density_scale_relative_unc)
            .summary(
                "density_scale_source",
                match fit.density_scale_source {
                    UncertaintySource::Points => "density_m3_unc_sys",
                    UncertaintySource::Stated => "density_scale_relative_uncertainty",
                    UncertaintySource::NotGiven => "not given",
                },
            )
            .summary(
                "temperature_uncertainty_source",
                temperature_source_name(fit.temperature_unc_source),
            )
            .summary("uncertainties_not_given", not_given)
            .summary("degeneracy", fit.degeneracy)
            .summary("hall_factor", fit.hall_factor)
            .summary("chi_square", fit.chi_square)
            .summary("degrees_of_freedom", fit.degrees_of_freedom)
            .summary(
                "reduced_chi_square",
                Some(fit.reduced_chi_square).filter(|_| fit.weighted),
            )
            .summary("chi_square_p_value", fit.chi_square_p_value)
            .summary("birge_ratio", fit.birge_ratio)
            .summary("floored_points", fit.floored_points)
            .summary("relative_uncertainty_floor", fit.relative_uncertainty_floor)
            .summary("effective_variance_passes", fit.effective_variance_passes)
            .summary("weighted", fit.weighted)
            .summary("points", data_rows)
            .summary("at_bound", &fit.at_bound)
            .summary("starts", fit.starts)
            .summary("starts_converged", fit.starts_converged)
            .warnings(warnings)
            .warnings(fit.warnings.iter().cloned());
        host.progress(1.0, "done");
        output.finish(rows)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::freeze_out::realistic::RealisticSeries;
    use mobilis_numerics::noise::Rng;
    use mobilis_sdk::sdk::run_typed;
    use serde_json::{json, Value};

    /// A realistic series as `hall.reduce` writes it (with the budget columns), or as an
    /// older table did (`density_m3_unc` only).
    fn hall_table(with_budget: bool) -> DataFrame {
        let series = RealisticSeries::compensated_silicon();
        let points = series.draw(&mut Rng::seeded(3)).points;
        let float = |f: &dyn Fn(&DensityPoint) -> f64| points.iter().map(f).collect::<Vec<f64>>();
        let mut columns = vec![
            Column::new("temperature_K".into(), float(&|p| p.temperature_k)),
            Column::new("density_m3".into(), float(&|p| p.density_m3)),
            Column::new("carrier_type".into(), vec!["n"; points.len()]),
        ];
        if with_budget {
            let total = float(&|p| p.density_unc_m3.unwrap().hypot(p.density_unc_sys_m3.unwrap()));
            columns.extend([
                Column::new("density_m3_unc".into(), total),
                Column::new("density_m3_unc_stat".into(), float(&|p| p.density_unc_m3.unwrap())),
                Column::new("density_m3_unc_sys".into(), float(&|p| p.density_unc_sys_m3.unwrap())),
                Column::new("temperature_K_unc".into(), float(&|p| p.temperature_unc_k.unwrap())),
                Column::new("hall_factor".into(), vec![1.0; points.len()]),
            ]);
        } else {
            columns.push(Column::new(
                "density_m3_unc".into(),
                float(&|p| p.density_unc_m3.unwrap()),
            ));
        }
        DataFrame::new(points.len(), columns).unwrap()
    }

    fn run(params: &str, table: DataFrame) -> Result<AnalysisOutput, AnalysisError> {
        let inputs = Inputs::from_tables([("hall".to_string(), table)]);
        run_typed::<FreezeOutFitAnalysis>(params, &inputs, &Host::detached())
    }

    // A 2D reduction (no thickness) has sheet densities only: the refusal says so and names
    // the sample sheet's thickness, instead of calling the series empty.
    #[test]
    fn a_sheet_without_volume_densities_is_refused_with_the_thickness_named() {
        let rows = 6;
        let table = |sheet_density: Option<f64>| {
            DataFrame::new(
                rows,
                vec![
                    Column::new(
                        "temperature_K".into(),
                        (0..rows).map(|k| 50.0 + 40.0 * k as f64).collect::<Vec<f64>>(),
                    ),
                    Column::new("density_m3".into(), vec![None::<f64>; rows]),
                    Column::new("sheet_density_m2".into(), vec![sheet_density; rows]),
                ],
            )
            .unwrap()
        };
        let error = run("{}", table(Some(3e15))).unwrap_err().to_string();
        assert!(
            error.contains("thickness_m") && error.contains("sheet_density_m2"),
            "{error}"
        );
        let error = run("{}", table(None)).unwrap_err().to_string();
        assert!(error.contains("+B and -B"), "{error}");
    }

    #[test]
    fn the_summary_carries_the_budget_and_the_diagnostics() {
        let output = run("{}", hall_table(true)).unwrap();
        let summary = &output.summary;
        let value = |key: &str| {
            summary[key]
                .as_f64()
                .unwrap_or_else(|| panic!("{key}: {:?}", summary[key]))
        };
        for name in [
            "dopant_density_m3",
            "compensating_density_m3",
            "net_density_m3",
            "ionization_energy_eV",
            "compensation_ratio",
        ] {
            let (total, stat, sys) = (
                value(&format!("{name}_unc")),
                value(&format!("{name}_unc_stat")),
                value(&format!("{name}_unc_sys")),
            );
            assert!((total - stat.hypot(sys)).abs() <= 1e-12 * total, "{name}");
        }
        // The 3 % thickness calibration reaches N_D through the fit's sensitivity: about
        // 3 %, somewhat more where the loose low-temperature points let the fit trade it
        // against the compensation (3.6 % for this draw).
        let relative_sys = value("dopant_density_m3_unc_sys") / value("dopant_density_m3");
        assert!((0.025..0.045).contains(&relative_sys), "{relative_sys}");
        assert!((value("density_scale_relative_uncertainty") - 0.03).abs() < 1e-12);
        assert_eq!(summary["density_scale_source"], "density_m3_unc_sys");
        assert_eq!(summary["temperature_uncertainty_source"], "temperature_K_unc");
        assert_eq!(summary["uncertainties_not_given"], json!([]));
        assert!(value("reduced_chi_square") > 0.0);
        assert!((0.0..=1.0).contains(&value("chi_square_p_value")));
        assert!(value("birge_ratio") >= 1.0);
        assert!(summary["floored_points"].as_u64().is_some());
        assert_eq!(summary["hall_factor"], json!(1.0));
        for column in [
            "temperature_K_unc",
            "density_m3_unc_stat",
            "hall_factor",
            "normalized_residual",
        ] {
            assert!(output.table.column(column).is_ok(), "{column}");
        }
        assert!(
            output.warnings.iter().all(|w| !w.contains("no calibration budget")),
            "{:?}",
            output.warnings
        );
    }

    #[test]
    fn an_older_table_is_read_as_statistical_and_says_what_was_not_given() {
        let output = run("{}", hall_table(false)).unwrap();
        assert!(
            output
                .warnings
                .iter()
                .any(|w| w.contains("no calibration budget was given")),
            "{:?}",
            output.warnings
        );
        let not_given = output.summary["uncertainties_not_given"].as_array().unwrap();
        assert_eq!(not_given.len(), 2, "{not_given:?}");
        assert_eq!(output.summary["dopant_density_m3_unc_sys"], json!(0.0));
        // Stated for the call instead: the scale and the temperature accuracy.
        let output = run(
            r#"{"density_scale_relative_uncertainty": 0.03, "temperature_uncertainty_K": 0.03}"#,
            hall_table(false),
        )
        .unwrap();
        assert_eq!(
            output.summary["density_scale_source"],
            "density_scale_relative_uncertainty"
        );
        assert_eq!(
            output.summary["temperature_uncertainty_source"],
            "temperature_uncertainty_K"
        );
        assert_eq!(output.summary["uncertainties_not_given"], json!([]));
        // Without any density uncertainty the fit is unweighted: the scatter sets the
        // errors, and there is no p-value or Birge ratio to report.
        let mut bare = hall_table(false);
        let _ = bare.drop_in_place("density_m3_unc").unwrap();
        let output = run("{}", bare).unwrap();
        assert_eq!(output.summary["weighted"], json!(false));
        assert_eq!(output.summary["chi_square_p_value"], Value::Null);
        assert_eq!(output.summary["birge_ratio"], Value::Null);
        assert_eq!(output.summary["reduced_chi_square"], Value::Null);
        assert!(output.summary["dopant_density_m3_unc"].as_f64().is_some());
    }

    #[test]
    fn hall_factor_parameters_exclude_each_other_and_bad_values_name_the_parameter() {
        let error = run(
            r#"{"hall_factor": 1.2, "hall_factor_table": [[30, 1.9], [300, 1.2]]}"#,
            hall_table(true),
        )
        .unwrap_err();
        assert!(error.to_string().contains("hall_factor_table"), "{error}");
        let error = run(r#"{"hall_factor_table": [[30, 1.9], [30, 1.2]]}"#, hall_table(true)).unwrap_err();
        assert!(error.to_string().contains("hall_factor_table"), "{error}");
        let output = run(r#"{"hall_factor_table": [[24, 1.2], [400, 1.2]]}"#, hall_table(true)).unwrap();
        assert_eq!(output.summary["hall_factor"], json!(1.2));
        let error = run(r#"{"relative_uncertainty_floor": 2}"#, hall_table(true)).unwrap_err();
        assert!(error.to_string().contains("relative_uncertainty_floor"), "{error}");
    }
}
