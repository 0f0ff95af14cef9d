//! `carriers.freeze_out_fit`: table glue of [`crate::freeze_out`].

use super::*;
use crate::freeze_out::{fit_freeze_out, FreezeOutSettings};
use mobilis_core::abi::{AnalysisDeclaration, InputRole};
use mobilis_core::sdk::{Analysis, AnalysisOutput, Host, Inputs};

pub struct FreezeOutFitAnalysis;

fn default_material() -> String {
    "Si".into()
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FreezeOutParams {
    #[serde(default = "default_material")]
    material: String,
    #[serde(default)]
    material_overrides: MaterialOverrideParams,
    #[serde(default)]
    carrier_type: Option<String>,
    #[serde(rename = "effective_dos_300K_m3", default)]
    effective_dos_300k_m3: Option<f64>,
    #[serde(default)]
    degeneracy: Option<f64>,
    #[serde(default)]
    hall_factor: Option<f64>,
    #[serde(default)]
    hall_factor_scattering_exponent: Option<f64>,
    #[serde(rename = "temperature_min_K", default)]
    temperature_min_k: Option<f64>,
    #[serde(rename = "temperature_max_K", default)]
    temperature_max_k: Option<f64>,
    #[serde(rename = "ionization_energy_bounds_eV", default)]
    ionization_energy_bounds_ev: Option<[f64; 2]>,
    #[serde(default)]
    compensation_bounds: Option<[f64; 2]>,
    #[serde(default)]
    curve_points: Option<usize>,
}

/// The `hall` input role shared by the carriers analyses that read a temperature series.
pub(crate) fn hall_role(extra: Vec<ColumnSpec>) -> InputRole {
    use ColumnType::*;
    let mut columns = vec![
        column("temperature_K", F64, Some("K"), "temperature of the point"),
        column(
            "carrier_type",
            Str,
            None,
            "n or p, from the sign of the Hall coefficient",
        )
        .optional(),
        column("sample", Str, None, "sample name (group by it for several samples)").optional(),
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
        let mut properties = material_schema_properties();
        properties.insert("effective_dos_300K_m3".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "replaces the majority band's effective density of states at 300 K (Nc for n-type, Nv for p-type), scaled as T^1.5"}));
        properties.insert("degeneracy".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "degeneracy factor of the majority level; default 2 for donors, 4 for acceptors"}));
        properties.insert("ionization_energy_bounds_eV".into(), json!({"type": "array", "items": {"type": "number", "exclusiveMinimum": 0}, "minItems": 2, "maxItems": 2, "description": "bounds of the fitted ionization energy, default [0.001, 1.0]"}));
        properties.insert("compensation_bounds".into(), json!({"type": "array", "items": {"type": "number", "exclusiveMinimum": 0, "exclusiveMaximum": 1}, "minItems": 2, "maxItems": 2, "description": "bounds of N_comp / N_maj, default [1e-6, 0.995]"}));
        properties.insert("curve_points".into(), json!({"type": "integer", "minimum": 2, "maximum": 100000, "default": 200, "description": "points of the fitted curve"}));
        AnalysisDeclaration {
            name: String::new(),
            summary: "Majority and compensating dopant densities and the ionization energy from carrier density against temperature (charge neutrality of a compensated semiconductor)".into(),
            description: "Fits ln n(T) with the exact charge-neutrality equation p + N_D+ = n + N_A- (mirrored for p-type): Boltzmann bands with Nc, Nv ~ T^1.5, the majority level with its degeneracy factor, fully ionized compensating centres, and the intrinsic carriers of the Varshni band gap at high temperature. Bounded Levenberg-Marquardt from many starts (derived from the data and a grid over compensation and energy), so the result does not depend on a guess. Uncertainties from the covariance; a parameter on a bound gets none.".into(),
            params: json!({"type": "object", "additionalProperties": false, "properties": properties}),
            inputs: vec![hall_role(vec![
                column("density_m3", F64, Some("m3"), "majority carrier density"),
                column("density_m3_unc", F64, Some("m3"), "its standard uncertainty; weights the fit").optional(),
            ])],
            outputs: vec![
                column("kind", Str, None, "data (a measured point) or curve (the fitted model)"),
                column("temperature_K", F64, Some("K"), "temperature"),
                column("density_m3", F64, Some("m3"), "measured density after the Hall-factor correction (data rows)"),
                column("density_m3_unc", F64, Some("m3"), "its uncertainty (data rows)"),
                column("fitted_density_m3", F64, Some("m3"), "the fitted model"),
                column("log_residual", F64, None, "ln(model) - ln(data) (data rows)"),
                column("normalized_residual", F64, None, "the residual over the relative uncertainty (data rows)"),
            ],
            summary_keys: vec![
                column("carrier_type", Str, None, "n or p"),
                column("dopant_density_m3", F64, Some("m3"), "majority dopant density (donors for n-type), with _unc"),
                column("compensating_density_m3", F64, Some("m3"), "compensating density (acceptors for n-type), with _unc"),
                column("net_density_m3", F64, Some("m3"), "dopant minus compensating, with _unc"),
                column("compensation_ratio", F64, None, "compensating / dopant, with _unc"),
                column("ionization_energy_eV", F64, Some("eV"), "majority level below its band edge, with _unc"),
                column("dopant_compensating_covariance_m6", F64, None, "covariance of the two densities"),
                column("reduced_chi_square", F64, None, "goodness of fit"),
            ],
        }
    }

    fn run(params: FreezeOutParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let hall = inputs.required("hall")?;
        let mut warnings = Vec::new();
        let points = density_points(hall, &mut warnings)?;
        let material = resolve_material(&params.material, &params.material_overrides)?;
        let mut settings = FreezeOutSettings::for_material(material);
        settings.carrier_type = parse_carrier_type(params.carrier_type.as_deref())?;
        settings.effective_dos_300k_m3 = params.effective_dos_300k_m3;
        settings.degeneracy = params.degeneracy;
        settings.hall_factor = hall_factor(params.hall_factor, params.hall_factor_scattering_exponent)?;
        settings.temperature_range_k = temperature_range(params.temperature_min_k, params.temperature_max_k)?;
        if let Some([low, high]) = params.ionization_energy_bounds_ev {
            settings.ionization_energy_bounds_ev = (low, high);
        }
        if let Some([low, high]) = params.compensation_bounds {
            settings.compensation_bounds = (low, high);
        }
        if let Some(count) = params.curve_points {
            settings.curve_points = count;
        }
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
        let (mut temperature, mut density, mut density_unc) = (Vec::new(), Vec::new(), Vec::new());
        let (mut fitted, mut residual, mut normalized) = (Vec::new(), Vec::new(), Vec::new());
        for point in &fit.points {
            kind.push("data");
            temperature.push(Some(point.temperature_k));
            density.push(Some(point.density_m3));
            density_unc.push(point.density_unc_m3);
            fitted.push(Some(point.model_density_m3));
            residual.push(Some(point.residual_ln));
            normalized.push(point.normalized_residual);
        }
        for point in &fit.curve {
            kind.push("curve");
            temperature.push(Some(point.temperature_k));
            density.push(None);
            density_unc.push(None);
            fitted.push(Some(point.density_m3));
            residual.push(None);
            normalized.push(None);
        }
        let table = frame(
            rows,
            vec![
                Column::new("kind".into(), kind),
                float_series("temperature_K", temperature),
                float_series("density_m3", density),
                float_series("density_m3_unc", density_unc),
                float_series("fitted_density_m3", fitted),
                float_series("log_residual", residual),
                float_series("normalized_residual", normalized),
            ],
        )?;
        let mut output = AnalysisOutput::new(table);
        let summary = &mut output.summary;
        summary.insert("carrier_type".into(), json!(fit.carrier_type.as_str()));
        summary.insert("material".into(), json!(params.material));
        insert_estimate(
            summary,
            "dopant_density_m3",
            fit.dopant_density_m3,
            fit.dopant_density_m3_unc,
        );
        insert_estimate(
            summary,
            "compensating_density_m3",
            fit.compensating_density_m3,
            fit.compensating_density_m3_unc,
        );
        insert_estimate(summary, "net_density_m3", fit.net_density_m3, fit.net_density_m3_unc);
        insert_estimate(
            summary,
            "compensation_ratio",
            fit.compensation_ratio,
            fit.compensation_ratio_unc,
        );
        insert_estimate(
            summary,
            "ionization_energy_eV",
            fit.ionization_energy_ev,
            fit.ionization_energy_ev_unc,
        );
        let both = fit.dopant_density_m3_unc.is_some() && fit.compensating_density_m3_unc.is_some();
        summary.insert(
            "dopant_compensating_covariance_m6".into(),
            json!(both.then_some(fit.covariance[0][1])),
        );
        summary.insert("degeneracy".into(), json!(fit.degeneracy));
        summary.insert("hall_factor".into(), json!(fit.hall_factor));
        summary.insert("chi_square".into(), json!(fit.chi_square));
        summary.insert("degrees_of_freedom".into(), json!(fit.degrees_of_freedom));
        summary.insert("reduced_chi_square".into(), json!(fit.reduced_chi_square));
        summary.insert("weighted".into(), json!(fit.weighted));
        summary.insert("points".into(), json!(data_rows));
        summary.insert("at_bound".into(), json!(fit.at_bound));
        summary.insert("starts".into(), json!(fit.starts));
        summary.insert("starts_converged".into(), json!(fit.starts_converged));
        warnings.extend(fit.warnings.iter().cloned());
        output.warnings = warnings;
        host.progress(1.0, "done");
        Ok(output)
    }
}
