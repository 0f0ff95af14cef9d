//! Table glue of the spectrum analyses: the `sweep` role into `SweepPoint`s, the
//! parameters into settings, and the results into tables ready to plot and summaries.
//!
//! A sweep at one field sign is accepted when it has rho_xy (the `sweep` role requires it):
//! `mobilis_physics::sweep::symmetrize` uses the branch as measured, and both analyses report
//! `single_field_sign: true` with a warning that the misalignment of the Hall contacts (a
//! part of rho_xx picked up in rho_xy, even in B) could not be removed.

use crate::mobility_spectrum::{
    mobility_spectrum_of_symmetrized, GridRange, RegularizationRule, SpectrumError, SpectrumSettings,
};
use crate::multi_carrier::{
    fit_sweep_monitored, CarrierSelection, InformationCriterion, MultiCarrierError, MultiCarrierSettings,
};
use crate::reduction::reduce;
use mobilis_physics::forward::tensor::CarrierKind;
use mobilis_physics::sweep::{symmetrize, SweepUse};
use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType};
use mobilis_sdk::sdk::{Analysis, AnalysisError, AnalysisOutput, Host, Inputs};
use mobilis_sdk::sweep_table::{single_sweep, sweep_role, sweep_schema_properties, SweepParams};
use polars::prelude::*;
use serde::Deserialize;
use serde_json::{json, Value};

fn invalid(message: impl Into<String>) -> AnalysisError {
    AnalysisError::InvalidInput(message.into())
}

fn column(name: &str, dtype: ColumnType, unit: Option<&str>, description: &str) -> ColumnSpec {
    ColumnSpec::new(name, dtype, unit, description)
}

/// The summary key that says a sweep was used as measured at one field sign.
fn single_field_sign_key() -> ColumnSpec {
    column(
        "single_field_sign",
        ColumnType::Bool,
        None,
        "true when the sweep had one field sign: used as measured, the Hall contacts' misalignment not removed",
    )
}

fn carrier_type(kind: CarrierKind) -> &'static str {
    kind.code()
}

fn float_series(name: &str, values: Vec<f64>) -> Column {
    Column::new(PlSmallStr::from_str(name), values)
}

/// `spectrum.multi_carrier_fit`.
pub struct MultiCarrierFitAnalysis;

#[derive(Debug, Deserialize, schemars::JsonSchema)]
pub struct MultiCarrierParams {
    #[serde(flatten)]
    sweep: SweepParams,
    #[serde(default)]
    thickness_m: Option<f64>,
    #[serde(default)]
    carriers: Option<Vec<String>>,
    #[serde(default)]
    max_carriers: Option<usize>,
    #[serde(default)]
    criterion: Option<String>,
    #[serde(default)]
    random_starts: Option<usize>,
    #[serde(default)]
    seed: Option<u64>,
    #[serde(flatten)]
    budget: crate::multi_carrier::summary::BudgetParams,
}

impl Analysis for MultiCarrierFitAnalysis {
    const NAME: &'static str = "spectrum.multi_carrier_fit";
    type Params = MultiCarrierParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let mut properties = sweep_schema_properties();
        properties.insert("thickness_m".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "conducting thickness: also report volume densities"}));
        properties.insert("carriers".into(), json!({"type": "array", "items": {"type": "string", "enum": ["n", "p"]}, "minItems": 1, "maxItems": 6, "description": "the carrier list, e.g. [\"n\", \"n\"]; default: chosen automatically by the information criterion"}));
        properties.insert("max_carriers".into(), json!({"type": "integer", "minimum": 1, "maximum": 5, "default": 3, "description": "automatic selection: the most carriers tried"}));
        properties.insert("criterion".into(), json!({"type": "string", "enum": ["bic", "aicc"], "default": "bic", "description": "information criterion of the automatic selection"}));
        properties.insert("random_starts".into(), json!({"type": "integer", "minimum": 0, "maximum": 200, "default": 12, "description": "random starts per carrier list, besides those derived from the data"}));
        properties.insert(
            "seed".into(),
            json!({"type": "integer", "minimum": 0, "default": 1, "description": "seed of the random starts"}),
        );
        properties.extend(crate::multi_carrier::summary::schema_properties());
        AnalysisDeclaration {
            name: String::new(),
            summary: "Sheet density and mobility of each carrier from the field dependence of sigma_xx and sigma_xy (discrete multi-carrier fit)".into(),
            description: "Symmetrizes rho_xx and antisymmetrizes rho_xy (interpolating each field branch), converts to the conductivity tensor and fits N Drude carriers jointly to sigma_xx(B) and sigma_xy(B), weighted by the uncertainties, from many starts. Without a carrier list N grows while the information criterion improves, trying every electron/hole split. Warns when carriers cannot be told apart in the field range (mu B_max < 1). A sweep at one field sign is used as measured and flagged single_field_sign.".into(),
            params: json!({"type": "object", "additionalProperties": false, "properties": properties}),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                column("field_T", F64, Some("T"), "field (symmetrized, |B|)"),
                column("sigma_xx_S", F64, Some("S"), "sheet conductivity from the data"),
                column("sigma_xy_S", F64, Some("S"), "transverse sheet conductivity from the data"),
                column("sigma_xx_fit_S", F64, Some("S"), "the fitted model"),
                column("sigma_xy_fit_S", F64, Some("S"), "the fitted model"),
                column("rho_xx_ohm_sq", F64, Some("ohm_sq"), "symmetrized data"),
                column("rho_xy_ohm", F64, Some("ohm"), "antisymmetrized data"),
                column("rho_xx_fit_ohm_sq", F64, Some("ohm_sq"), "the fitted model"),
                column("rho_xy_fit_ohm", F64, Some("ohm"), "the fitted model"),
                column("residual_xx", F64, None, "whitened residual of sigma_xx"),
                column("residual_xy", F64, None, "whitened residual of sigma_xy"),
            ],
            summary_keys: vec![
                column("sample", ColumnType::Str, None, "the sweep's sample"),
                column("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                column("carrier_count", ColumnType::I64, None, "carriers fitted"),
                column("criterion", ColumnType::Str, None, "information criterion of the selection"),
                column("score", ColumnType::F64, None, "the chosen fit's criterion value"),
                column("candidates", ColumnType::Str, None, "list of {carriers, score, chi_square, ...}: every carrier list tried"),
                column("chi_square", ColumnType::F64, None, "chi^2 of the fit"),
                column("reduced_chi_square", ColumnType::F64, None, "chi^2 / nu of the fit"),
                column("chi_square_p_value", ColumnType::F64, None, "P(chi^2 >= observed) when the uncertainties are stated"),
                column("birge_ratio", ColumnType::F64, None, "sqrt(chi^2 / nu) when above 1"),
                column("degrees_of_freedom", ColumnType::I64, None, "points minus fitted parameters"),
                column("weighted", ColumnType::Bool, None, "the fit used the stated uncertainties"),
                column("floored_points", ColumnType::I64, None, "points whose relative uncertainty was raised to relative_uncertainty_floor"),
                column("relative_uncertainty_floor", ColumnType::F64, None, "the floor applied to relative uncertainties"),
                column("reading_reuse_factor", ColumnType::F64, None, "how often a reading enters the symmetrized points"),
                column("calibrations_not_stated", ColumnType::Str, None, "list of the calibrations not stated (their defaults were assumed)"),
                column("max_field_T", ColumnType::F64, Some("T"), "the largest |B|"),
                column("max_interpolation_correction", ColumnType::F64, None, "largest relative change made by interpolating the field branches"),
                column("max_rho_xx_asymmetry", ColumnType::F64, None, "largest removed odd part relative to rho_xx"),
                column("max_rho_xy_asymmetry", ColumnType::F64, None, "largest removed even part relative to rho_xy"),
                column("carriers", Str, None, "list of {carrier_type, sheet_density_m2, mobility_m2_per_Vs} with _unc"),
                single_field_sign_key(),
            ],
            figures: crate::figures::multi_carrier_fit(),
            ..Default::default()
        }
    }

    fn run(params: MultiCarrierParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweep = inputs.required("sweep")?;
        let table = single_sweep(sweep, &params.sweep.grouping())?;
        let (points, identity) = (table.points.clone(), Value::Object(table.identity()));
        let mut grouping_warnings = table.warnings.clone();
        let points = reduced_if_long(
            points,
            params.sweep.settings().zero_field_tolerance_t,
            &mut grouping_warnings,
        );
        let mut settings = MultiCarrierSettings::default();
        settings.selection = match (&params.carriers, params.max_carriers) {
            (Some(list), _) => CarrierSelection::Kinds(
                list.iter()
                    .map(|kind| CarrierKind::from_code(kind).map_err(invalid))
                    .collect::<Result<_, _>>()?,
            ),
            (None, Some(max_carriers)) => CarrierSelection::Automatic { max_carriers },
            (None, None) => CarrierSelection::default(),
        };
        settings.criterion = match params.criterion.as_deref() {
            None | Some("bic") => InformationCriterion::Bic,
            Some("aicc") => InformationCriterion::Aicc,
            Some(other) => return Err(invalid(format!("criterion `{other}` is unknown; use bic or aicc"))),
        };
        if let Some(starts) = params.random_starts {
            settings.random_starts = starts;
        }
        if let Some(seed) = params.seed {
            settings.seed = seed;
        }
        if let Some(floor) = params.budget.relative_uncertainty_floor {
            settings.relative_uncertainty_floor = floor;
        }
        settings.calibration = params.budget.calibration();
        let result =
            fit_sweep_monitored(&points, &params.sweep.settings(), &settings, host).map_err(|error| match error {
                MultiCarrierError::Cancelled => AnalysisError::Cancelled,
                MultiCarrierError::NotConverged { .. } => AnalysisError::Numerical(error.to_string()),
                other => invalid(other.to_string()),
            })?;
        let fit = &result.fit;
        let curve = &fit.curve;
        let table = DataFrame::new(
            curve.len(),
            vec![
                float_series("field_T", curve.iter().map(|p| p.field_t).collect()),
                float_series("sigma_xx_S", curve.iter().map(|p| p.sigma_xx_s).collect()),
                float_series("sigma_xy_S", curve.iter().map(|p| p.sigma_xy_s).collect()),
                float_series("sigma_xx_fit_S", curve.iter().map(|p| p.sigma_xx_fit_s).collect()),
                float_series("sigma_xy_fit_S", curve.iter().map(|p| p.sigma_xy_fit_s).collect()),
                float_series("rho_xx_ohm_sq", curve.iter().map(|p| p.rho_xx_ohm_sq).collect()),
                float_series("rho_xy_ohm", curve.iter().map(|p| p.rho_xy_ohm).collect()),
                float_series("rho_xx_fit_ohm_sq", curve.iter().map(|p| p.rho_xx_fit_ohm_sq).collect()),
                float_series("rho_xy_fit_ohm", curve.iter().map(|p| p.rho_xy_fit_ohm).collect()),
                float_series("residual_xx", curve.iter().map(|p| p.residual_xx).collect()),
                Column::new(
                    "residual_xy".into(),
                    curve.iter().map(|p| p.residual_xy).collect::<Vec<_>>(),
                ),
            ],
        )
        .map_err(|e| AnalysisError::Numerical(e.to_string()))?;
        let carriers: Vec<Value> = fit
            .carriers
            .iter()
            .map(|c| crate::multi_carrier::summary::carrier_summary(c, params.thickness_m))
            .collect();
        let mut output = AnalysisOutput::new(table);
        let summary = &mut output.summary;
        if let Value::Object(identity) = identity {
            summary.extend(identity);
        }
        summary.insert("carrier_count".into(), json!(carriers.len()));
        summary.insert("carriers".into(), Value::Array(carriers));
        summary.insert("criterion".into(), json!(fit.criterion.name()));
        summary.insert("score".into(), json!(fit.score));
        summary.insert("chi_square".into(), json!(fit.chi_square));
        summary.insert("degrees_of_freedom".into(), json!(fit.degrees_of_freedom));
        summary.extend(crate::multi_carrier::summary::fit_summary(fit));
        summary.insert("weighted".into(), json!(fit.weighted));
        summary.insert("max_field_T".into(), json!(fit.max_field_t));
        summary.insert(
            "candidates".into(),
            Value::Array(
                fit.candidates
                    .iter()
                    .map(|c| {
                        json!({
                            "carriers": c.kinds.iter().map(|k| carrier_type(*k)).collect::<Vec<_>>(),
                            "score": c.score,
                            "chi_square": c.chi_square,
                            "failure": c.failure,
                        })
                    })
                    .collect(),
            ),
        );
        summary.insert(
            "max_rho_xx_asymmetry".into(),
            json!(result.symmetrized.max_rho_xx_asymmetry),
        );
        summary.insert(
            "max_rho_xy_asymmetry".into(),
            json!(result.symmetrized.max_rho_xy_asymmetry),
        );
        summary.insert(
            "max_interpolation_correction".into(),
            json!(result.max_interpolation_correction),
        );
        summary.insert("single_field_sign".into(), json!(result.symmetrized.single_field_sign));
        output.warnings = grouping_warnings;
        output.warnings.extend(result.symmetrized.warnings(SweepUse::Tensor));
        output.warnings.extend(fit.warnings.iter().cloned());
        host.progress(1.0, "done");
        Ok(output)
    }
}

/// `spectrum.mobility`.
pub struct MobilitySpectrumAnalysis;

#[derive(Debug, Deserialize, schemars::JsonSchema)]
pub struct SpectrumParams {
    #[serde(flatten)]
    sweep: SweepParams,
    #[serde(default)]
    thickness_m: Option<f64>,
    #[serde(default)]
    points_per_sign: Option<usize>,
    #[serde(rename = "mobility_min_m2_per_Vs", default)]
    mobility_min_m2_per_vs: Option<f64>,
    #[serde(rename = "mobility_max_m2_per_Vs", default)]
    mobility_max_m2_per_vs: Option<f64>,
    #[serde(default)]
    regularization: Option<String>,
    #[serde(default)]
    regularization_strength: Option<f64>,
    #[serde(default)]
    peak_threshold: Option<f64>,
    #[serde(default)]
    uncertainty_replicas: Option<usize>,
    #[serde(flatten)]
    budget: crate::multi_carrier::summary::BudgetParams,
}

impl Analysis for MobilitySpectrumAnalysis {
    const NAME: &'static str = "spectrum.mobility";
    type Params = SpectrumParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let defaults = SpectrumSettings::default();
        let mut properties = sweep_schema_properties();
        properties.insert("thickness_m".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "conducting thickness: also report volume densities"}));
        properties.insert("points_per_sign".into(), json!({"type": "integer", "minimum": 8, "maximum": 1000, "default": defaults.points_per_sign, "description": "grid mobilities per carrier sign (logarithmic grid)"}));
        properties.insert("mobility_min_m2_per_Vs".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "lowest grid mobility; default 0.1 / B_max"}));
        properties.insert("mobility_max_m2_per_Vs".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "highest grid mobility; default 10 / B_min"}));
        properties.insert("regularization".into(), json!({"type": "string", "enum": ["auto", "discrepancy", "l_curve", "fixed"], "default": "auto", "description": "how the smoothing strength is chosen: auto (discrepancy principle with uncertainties, L-curve without), or fixed (regularization_strength)"}));
        properties.insert("regularization_strength".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "the dimensionless strength for regularization: fixed"}));
        properties.insert("peak_threshold".into(), json!({"type": "number", "exclusiveMinimum": 0, "exclusiveMaximum": 1, "default": defaults.peak_threshold, "description": "a local maximum is a peak above this fraction of the largest spectrum value"}));
        properties.insert("uncertainty_replicas".into(), json!({"type": "integer", "minimum": 0, "maximum": 1000, "default": defaults.uncertainty_replicas, "description": "bootstrap replicas for the peaks' uncertainties (0: none)"}));
        properties.extend(crate::multi_carrier::summary::schema_properties());
        AnalysisDeclaration {
            name: String::new(),
            summary: "Mobility spectrum of electrons and holes: the Beck-Anderson envelope and a regularized non-negative spectrum with its peaks integrated into sheet densities and mobilities".into(),
            description: "On a logarithmic mobility grid for each sign: the Beck-Anderson upper bound (J. Appl. Phys. 62, 541, 1987) and a regularized spectrum by non-negative least squares with a second-difference penalty in ln mu (Provencher's CONTIN approach on the Beck-Anderson kernel), its strength chosen by the discrepancy principle or the L-curve. Reports progress and stops promptly when cancelled (analysis.cancel).".into(),
            params: json!({"type": "object", "additionalProperties": false, "properties": properties}),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                column("mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "grid mobility magnitude"),
                column("electron_envelope_S", F64, Some("S"), "Beck-Anderson bound for electrons"),
                column("electron_spectrum_S", F64, Some("S"), "d sigma / d ln mu of electrons"),
                column("electron_density_m2", F64, Some("m2"), "d n / d ln mu of electrons"),
                column("hole_envelope_S", F64, Some("S"), "Beck-Anderson bound for holes"),
                column("hole_spectrum_S", F64, Some("S"), "d sigma / d ln mu of holes"),
                column("hole_density_m2", F64, Some("m2"), "d n / d ln mu of holes"),
            ],
            summary_keys: vec![
                column("sample", ColumnType::Str, None, "the sweep's sample"),
                column("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                column("regularization", ColumnType::Str, None, "how the smoothing strength was chosen"),
                column("regularization_strength", ColumnType::F64, None, "the dimensionless smoothing strength used"),
                column("chi_square", ColumnType::F64, None, "chi^2 of the regularized spectrum"),
                column("data_count", ColumnType::I64, None, "data values fitted"),
                column("total_conductance_S", ColumnType::F64, Some("S"), "sigma_xx(0) of the data"),
                column("floored_points", ColumnType::I64, None, "points whose relative uncertainty was raised to relative_uncertainty_floor"),
                column("reading_reuse_factor", ColumnType::F64, None, "how often a reading enters the symmetrized points"),
                column("calibrations_not_stated", ColumnType::Str, None, "list of the calibrations not stated (their defaults were assumed)"),
                column("peaks", Str, None, "list of {carrier_type, sheet_density_m2, mobility_m2_per_Vs} with _unc"),
                single_field_sign_key(),
            ],
            figures: crate::figures::mobility(),
            ..Default::default()
        }
    }

    fn run(params: SpectrumParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweep = inputs.required("sweep")?;
        let table = single_sweep(sweep, &params.sweep.grouping())?;
        let (points, identity) = (table.points.clone(), Value::Object(table.identity()));
        let mut grouping_warnings = table.warnings.clone();
        let points = reduced_if_long(
            points,
            params.sweep.settings().zero_field_tolerance_t,
            &mut grouping_warnings,
        );
        let mut settings = SpectrumSettings::default();
        if let Some(count) = params.points_per_sign {
            settings.points_per_sign = count;
        }
        settings.mobility_range = match (params.mobility_min_m2_per_vs, params.mobility_max_m2_per_vs) {
            (Some(min), Some(max)) => Some(GridRange {
                min_mobility_m2_per_vs: min,
                max_mobility_m2_per_vs: max,
            }),
            (None, None) => None,
            _ => {
                return Err(invalid(
                    "give both mobility_min_m2_per_Vs and mobility_max_m2_per_Vs, or neither",
                ))
            }
        };
        settings.rule = match (params.regularization.as_deref(), params.regularization_strength) {
            (None | Some("auto"), None) => RegularizationRule::Auto,
            (Some("discrepancy"), None) => RegularizationRule::Discrepancy,
            (Some("l_curve"), None) => RegularizationRule::LCurve,
            (Some("fixed") | None, Some(strength)) => RegularizationRule::Fixed(strength),
            (Some("fixed"), None) => return Err(invalid("regularization: fixed needs regularization_strength")),
            (Some(other), Some(_)) => {
                return Err(invalid(format!(
                    "regularization_strength goes with regularization: fixed, not `{other}`"
                )))
            }
            (Some(other), None) => {
                return Err(invalid(format!(
                    "regularization `{other}` is unknown; use auto, discrepancy, l_curve or fixed"
                )))
            }
        };
        if let Some(threshold) = params.peak_threshold {
            settings.peak_threshold = threshold;
        }
        if let Some(replicas) = params.uncertainty_replicas {
            settings.uncertainty_replicas = replicas;
        }
        if let Some(floor) = params.budget.relative_uncertainty_floor {
            settings.relative_uncertainty_floor = floor;
        }
        settings.calibration = params.budget.calibration();
        let to_analysis_error = |error: SpectrumError| match error {
            SpectrumError::Cancelled => AnalysisError::Cancelled,
            SpectrumError::Numerical(_) => AnalysisError::Numerical(error.to_string()),
            other => invalid(other.to_string()),
        };
        // Symmetrized here rather than inside the spectrum, so that the summary can say
        // whether the sweep had one field sign.
        let sweep_settings = params.sweep.settings();
        let symmetrized =
            symmetrize(&points, &sweep_settings).map_err(|error| to_analysis_error(SpectrumError::from(error)))?;
        let spectrum = mobility_spectrum_of_symmetrized(&points, &sweep_settings, &symmetrized, &settings, host)
            .map_err(to_analysis_error)?;
        let rows = spectrum.mobility_m2_per_vs.len();
        let table = DataFrame::new(
            rows,
            vec![
                float_series("mobility_m2_per_Vs", spectrum.mobility_m2_per_vs.clone()),
                float_series("electron_envelope_S", spectrum.electron.envelope_s.clone()),
                float_series("electron_spectrum_S", spectrum.electron.spectrum_s.clone()),
                float_series("electron_density_m2", spectrum.electron.density_m2.clone()),
                float_series("hole_envelope_S", spectrum.hole.envelope_s.clone()),
                float_series("hole_spectrum_S", spectrum.hole.spectrum_s.clone()),
                float_series("hole_density_m2", spectrum.hole.density_m2.clone()),
            ],
        )
        .map_err(|e| AnalysisError::Numerical(e.to_string()))?;
        let peaks: Vec<Value> = spectrum
            .peaks
            .iter()
            .map(|p| crate::mobility_spectrum::summary::peak_summary(p, params.thickness_m))
            .collect();
        let mut output = AnalysisOutput::new(table);
        let summary = &mut output.summary;
        if let Value::Object(identity) = identity {
            summary.extend(identity);
        }
        summary.insert("peaks".into(), Value::Array(peaks));
        summary.insert("regularization".into(), json!(spectrum.regularization.rule.name()));
        summary.insert("regularization_strength".into(), json!(spectrum.regularization.lambda));
        summary.insert("chi_square".into(), json!(spectrum.regularization.chi_square));
        summary.insert("data_count".into(), json!(spectrum.regularization.data_count));
        summary.insert("total_conductance_S".into(), json!(spectrum.total_conductance_s));
        summary.extend(crate::mobility_spectrum::summary::spectrum_summary(&spectrum));
        summary.insert("single_field_sign".into(), json!(symmetrized.single_field_sign));
        output.warnings = grouping_warnings;
        output.warnings.extend(symmetrized.warnings(SweepUse::Tensor));
        output.warnings.extend(spectrum.warnings.iter().cloned());
        Ok(output)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_numerics::noise::Rng;
    use mobilis_physics::forward::tensor::{synthetic_sweep, Carrier, SweepImperfections, SweepNoise};
    use mobilis_sdk::sdk::run_typed;

    /// A sweep table of one electron with a Hall misalignment, at the given signed fields.
    fn table(fields: &[f64]) -> Inputs {
        let carriers = [Carrier::electron(5e15, 1.2)];
        let points = synthetic_sweep(
            &carriers,
            fields,
            &SweepNoise {
                absolute_ohm: 0.0,
                relative: 1e-4,
            },
            &SweepImperfections {
                hall_misalignment: 0.01,
                longitudinal_hall_pickup: 0.0,
            },
            &mut Rng::seeded(4),
        )
        .unwrap();
        let frame = DataFrame::new(
            points.len(),
            vec![
                float_series("field_T", points.iter().map(|p| p.field_t).collect()),
                float_series("rho_xx_ohm_sq", points.iter().map(|p| p.rho_xx_ohm_sq).collect()),
                float_series("rho_xy_ohm", points.iter().map(|p| p.rho_xy_ohm).collect()),
                float_series("temperature_K", vec![4.2; points.len()]),
            ],
        )
        .unwrap();
        Inputs::from_tables([("sweep".to_string(), frame)])
    }

    // One branch with rho_xy: both analyses run, flag single_field_sign and warn that the
    // misalignment could not be removed; with both branches the flag is false.
    #[test]
    fn one_field_sign_is_flagged_by_both_analyses() {
        let positive: Vec<f64> = (0..=30).map(|k| 0.3 * k as f64).collect();
        let negative: Vec<f64> = positive.iter().map(|b| -b).collect();
        let both: Vec<f64> = positive.iter().chain(&negative[1..]).copied().collect();
        for (fields, single) in [(&positive, true), (&negative, true), (&both, false)] {
            let inputs = table(fields);
            let fit =
                run_typed::<MultiCarrierFitAnalysis>(r#"{"carriers": ["n"]}"#, &inputs, &Host::detached()).unwrap();
            assert_eq!(fit.summary["single_field_sign"], json!(single));
            let density = fit.summary["carriers"][0]["sheet_density_m2"].as_f64().unwrap();
            // The misalignment (1 % of rho_xx in rho_xy) stays in a single branch and moves
            // the density by about that much; both branches remove it.
            let tolerance = if single { 0.03 } else { 1e-3 };
            assert!((density / 5e15 - 1.0).abs() < tolerance, "{density}");
            let warned = fit
                .warnings
                .iter()
                .any(|w| w.starts_with("single_field_sign") && w.contains("misalignment"));
            assert_eq!(warned, single, "{:?}", fit.warnings);
            let spectrum = run_typed::<MobilitySpectrumAnalysis>(
                r#"{"uncertainty_replicas": 0, "points_per_sign": 40}"#,
                &inputs,
                &Host::detached(),
            )
            .unwrap();
            assert_eq!(spectrum.summary["single_field_sign"], json!(single));
            assert_eq!(
                spectrum.warnings.iter().any(|w| w.starts_with("single_field_sign")),
                single
            );
        }
    }

    // The budget's parameters reach both analyses by their names: stated calibrations
    // make the systematic part (densities take the field, current and voltage scales in
    // quadrature), and what is not stated is listed.
    #[test]
    fn stated_calibrations_reach_both_analyses() {
        let positive: Vec<f64> = (0..=30).map(|k| 0.3 * k as f64).collect();
        let fields: Vec<f64> = positive
            .iter()
            .chain(&positive[1..])
            .enumerate()
            .map(|(i, b)| if i > 30 { -b } else { *b })
            .collect();
        let inputs = table(&fields);
        let params = r#"{"carriers": ["n"], "field_calibration_rel": 0.01, "current_calibration_rel": 0.002}"#;
        let fit = run_typed::<MultiCarrierFitAnalysis>(params, &inputs, &Host::detached()).unwrap();
        let carrier = &fit.summary["carriers"][0];
        let relative =
            carrier["sheet_density_m2_unc_sys"].as_f64().unwrap() / carrier["sheet_density_m2"].as_f64().unwrap();
        let expected = (0.01f64.powi(2) + 0.002f64.powi(2) + 1e-4f64.powi(2)).sqrt();
        assert!(
            (relative / expected - 1.0).abs() < 1e-9,
            "{relative} against {expected}"
        );
        assert_eq!(
            fit.summary["calibrations_not_stated"],
            json!(["voltage_calibration_rel"])
        );
        let spectrum = run_typed::<MobilitySpectrumAnalysis>(
            r#"{"uncertainty_replicas": 0, "points_per_sign": 40, "field_calibration_rel": 0.01, "current_calibration_rel": 0.002, "voltage_calibration_rel": 0.0}"#,
            &inputs,
            &Host::detached(),
        )
        .unwrap();
        assert_eq!(spectrum.summary["calibrations_not_stated"], json!([]));
    }

    // The temperature grouping is a parameter; a bad value is refused naming it.
    #[test]
    fn bad_temperature_tolerance_is_refused_with_its_name() {
        let inputs = table(&[0.0, 1.0, 2.0, 3.0, -1.0, -2.0, -3.0]);
        let error =
            run_typed::<MultiCarrierFitAnalysis>(r#"{"temperature_tolerance_K": -1}"#, &inputs, &Host::detached())
                .unwrap_err();
        assert!(error.to_string().contains("temperature_tolerance_K"), "{error}");
    }
}

/// A long logged sweep reduced onto a field grid (see `crate::reduction`), with a warning
/// that says so; a short sweep as it is.
fn reduced_if_long(
    points: Vec<mobilis_physics::sweep::SweepPoint>,
    zero_field_tolerance_t: f64,
    warnings: &mut Vec<String>,
) -> Vec<mobilis_physics::sweep::SweepPoint> {
    match reduce(&points, zero_field_tolerance_t) {
        Some(reduced) => {
            warnings.push(reduced.note());
            reduced.points
        }
        None => points,
    }
}
