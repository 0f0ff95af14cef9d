//! `mr.symmetrize`, `mr.ratio`, `mr.kohler` and `mr.two_band_fit`: the classical
//! magnetoresistance analyses.

use super::*;
use crate::kohler::{kohler, KohlerCurve, KohlerSettings};
use crate::ratio::{magnetoresistance, RatioSettings, ZeroFieldResistivity};
use crate::symmetrize::{symmetrize_sweep, SymmetrizeOptions};
use crate::two_band::{fit_two_band_sweep, TwoBandError, TwoBandSettings};
use mobilis_physics::forward::tensor::CarrierKind;
use mobilis_sdk::abi::AnalysisDeclaration;
use mobilis_sdk::sdk::{Analysis, AnalysisOutput, Host, Inputs};
use mobilis_sdk::sweep_table::{
    single_field_sign_series_warning, single_sweep, sweep_role, sweep_schema_properties, sweeps_by_temperature,
    SweepParams,
};
use serde::Deserialize;
use serde_json::{json, Value};

fn schema(properties: serde_json::Map<String, Value>) -> Value {
    json!({"type": "object", "additionalProperties": false, "properties": properties})
}

/// The summary key every analysis of a sweep carries.
pub(crate) fn single_field_sign_key() -> ColumnSpec {
    column(
        "single_field_sign",
        ColumnType::Bool,
        None,
        "true when the sweep had one field sign and was used as measured, not symmetrized (contact misalignment not removed)",
    )
}

fn zero_field_properties(properties: &mut serde_json::Map<String, Value>) {
    properties.insert("zero_field".into(), json!({"type": "string", "enum": ["measured", "extrapolated"], "default": "measured", "description": "rho(0) from the points at zero field, or extrapolated quadratically from the lowest fields when there is none"}));
    properties.insert("extrapolation_points".into(), json!({"type": "integer", "minimum": 3, "default": crate::ratio::DEFAULT_EXTRAPOLATION_POINTS, "description": "lowest-field points of the quadratic extrapolation"}));
}

#[derive(Debug, Default, Deserialize, schemars::JsonSchema)]
struct ZeroFieldParams {
    #[serde(default)]
    zero_field: Option<String>,
    #[serde(default)]
    extrapolation_points: Option<usize>,
}

fn ratio_settings(sweep: &SweepParams, zero: &ZeroFieldParams) -> Result<RatioSettings, AnalysisError> {
    let zero_field = match zero.zero_field.as_deref() {
        None | Some("measured") => ZeroFieldResistivity::Measured,
        Some("extrapolated") => ZeroFieldResistivity::Extrapolated {
            points: zero
                .extrapolation_points
                .unwrap_or(crate::ratio::DEFAULT_EXTRAPOLATION_POINTS),
            max_field_t: None,
        },
        Some(other) => {
            return Err(invalid(format!(
                "zero_field `{other}` is unknown; use measured or extrapolated"
            )))
        }
    };
    Ok(RatioSettings {
        sweep: sweep.settings(),
        zero_field,
    })
}

// ---------------------------------------------------------------------------------------
// mr.symmetrize

pub struct SymmetrizeAnalysis;

#[derive(Debug, Deserialize, schemars::JsonSchema)]
pub struct SymmetrizeParams {
    #[serde(flatten)]
    sweep: SweepParams,
    #[serde(rename = "misalignment_max_field_T", default)]
    misalignment_max_field_t: Option<f64>,
}

impl Analysis for SymmetrizeAnalysis {
    const NAME: &'static str = "mr.symmetrize";
    type Params = SymmetrizeParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let mut properties = sweep_schema_properties();
        properties.insert("misalignment_max_field_T".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "estimate the contact misalignment from points up to this field; default the lower quarter of the overlap"}));
        AnalysisDeclaration {
            name: String::new(),
            summary: "Even part of rho_xx and odd part of rho_xy of a sweep, with the residual asymmetry (a measure of contact misalignment)".into(),
            description: "Each field branch is interpolated onto the common |B| points of the overlap; rho_xx(|B|) = (rho_xx(+B) + rho_xx(-B))/2, rho_xy(|B|) = (rho_xy(+B) - rho_xy(-B))/2. The removed parts (odd in rho_xx, even in rho_xy) are reported point by point and summarised as a misalignment fraction rho_xy_even / rho_xx and a Hall pickup in rho_xx.".into(),
            params: schema(properties),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                column("field_T", F64, Some("T"), "|B|"),
                column("rho_xx_ohm_sq", F64, Some("ohm_sq"), "even part"),
                column("rho_xx_ohm_sq_unc", F64, Some("ohm_sq"), "standard uncertainty"),
                column("rho_xy_ohm", F64, Some("ohm"), "odd part, positive for holes"),
                column("rho_xy_ohm_unc", F64, Some("ohm"), "standard uncertainty"),
                column("rho_xx_odd_ohm_sq", F64, Some("ohm_sq"), "the removed odd part of rho_xx"),
                column("rho_xy_even_ohm", F64, Some("ohm"), "the removed even part of rho_xy"),
                column("rho_xx_asymmetry", F64, None, "removed part relative to rho_xx"),
                column("rho_xy_asymmetry", F64, None, "removed part relative to rho_xy"),
            ],
            summary_keys: vec![
                column("sample", ColumnType::Str, None, "the sweep's sample"),
                column("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                column("hall_pickup_fraction", ColumnType::F64, None, "part of rho_xx picked up in rho_xy, with _unc"),
                column("max_rho_xx_asymmetry", ColumnType::F64, None, "largest removed odd part relative to rho_xx"),
                column("overlap_T", ColumnType::F64, Some("T"), "[lowest, highest] |B| where both field signs were measured"),
                column("points_outside_overlap", ColumnType::I64, None, "points outside the overlap of the field signs"),
                column("misalignment_fraction", F64, None, "rho_xy_even / rho_xx at low field, with _unc"),
                column("max_rho_xy_asymmetry", F64, None, "largest removed even part relative to rho_xy"),
            ],
            figures: crate::figures::symmetrize(),
            ..Default::default()
        }
    }

    fn run(params: SymmetrizeParams, inputs: &Inputs, _host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweep = single_sweep(inputs.required("sweep")?, &params.sweep.grouping())?;
        let options = SymmetrizeOptions {
            sweep: params.sweep.settings(),
            misalignment_max_field_t: params.misalignment_max_field_t,
        };
        let result = symmetrize_sweep(&sweep.points, &options).map_err(|e| invalid(e.to_string()))?;
        let rows = &result.rows;
        let table = frame(
            rows.len(),
            vec![
                floats("field_T", rows.iter().map(|r| r.field_t).collect()),
                floats("rho_xx_ohm_sq", rows.iter().map(|r| r.rho_xx_ohm_sq).collect()),
                optional("rho_xx_ohm_sq_unc", rows.iter().map(|r| r.rho_xx_unc_ohm_sq).collect()),
                floats("rho_xy_ohm", rows.iter().map(|r| r.rho_xy_ohm).collect()),
                optional("rho_xy_ohm_unc", rows.iter().map(|r| r.rho_xy_unc_ohm).collect()),
                floats("rho_xx_odd_ohm_sq", rows.iter().map(|r| r.rho_xx_odd_ohm_sq).collect()),
                floats("rho_xy_even_ohm", rows.iter().map(|r| r.rho_xy_even_ohm).collect()),
                floats("rho_xx_asymmetry", rows.iter().map(|r| r.rho_xx_asymmetry).collect()),
                floats("rho_xy_asymmetry", rows.iter().map(|r| r.rho_xy_asymmetry).collect()),
            ],
        )?;
        let mut output = AnalysisOutput::new(table);
        let summary = &mut output.summary;
        summary.extend(sweep.identity());
        let s = &result.summary;
        summary.insert("misalignment_fraction".into(), json!(s.misalignment.fraction));
        summary.insert("misalignment_fraction_unc".into(), json!(s.misalignment.fraction_unc));
        if let Some(pickup) = &s.hall_pickup {
            summary.insert("hall_pickup_fraction".into(), json!(pickup.fraction));
            summary.insert("hall_pickup_fraction_unc".into(), json!(pickup.fraction_unc));
        }
        summary.insert("max_rho_xx_asymmetry".into(), json!(s.max_rho_xx_asymmetry));
        summary.insert("max_rho_xy_asymmetry".into(), json!(s.max_rho_xy_asymmetry));
        summary.insert("overlap_T".into(), json!([s.overlap_t.0, s.overlap_t.1]));
        summary.insert("points_outside_overlap".into(), json!(s.points_outside_overlap));
        output.warnings = sweep.warnings.clone();
        output.warnings.extend(result.warnings.iter().cloned());
        Ok(output)
    }
}

// ---------------------------------------------------------------------------------------
// mr.ratio

pub struct RatioAnalysis;

#[derive(Debug, Deserialize, schemars::JsonSchema)]
pub struct RatioParams {
    #[serde(flatten)]
    sweep: SweepParams,
    #[serde(flatten)]
    zero: ZeroFieldParams,
}

impl Analysis for RatioAnalysis {
    const NAME: &'static str = "mr.ratio";
    type Params = RatioParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let mut properties = sweep_schema_properties();
        zero_field_properties(&mut properties);
        AnalysisDeclaration {
            name: String::new(),
            summary: "Magnetoresistance (rho(B) - rho(0)) / rho(0) of a symmetrized sweep, rho(0) from the data at zero field".into(),
            description: "rho_xx is symmetrized first (a sweep at one field sign is used as measured, rho_xx being even in B, and flagged single_field_sign); rho(0) is the mean of the zero-field points (|B| <= zero_field_tolerance_T) (or, with zero_field: extrapolated, a quadratic fit to the lowest fields). Uncertainties propagate when the sweep has them.".into(),
            params: schema(properties),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                column("field_T", F64, Some("T"), "|B|"),
                column("rho_xx_ohm_sq", F64, Some("ohm_sq"), "symmetrized rho_xx"),
                column("rho_xx_ohm_sq_unc", F64, Some("ohm_sq"), "standard uncertainty"),
                column("magnetoresistance", F64, None, "(rho(B) - rho(0)) / rho(0)"),
                column("magnetoresistance_unc", F64, None, "standard uncertainty"),
            ],
            summary_keys: vec![
                column("sample", ColumnType::Str, None, "the sweep's sample"),
                column("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                column("rho0_method", ColumnType::Str, None, "how rho(0) was obtained"),
                column("max_field_T", ColumnType::F64, Some("T"), "the largest |B|"),
                column("max_magnetoresistance", ColumnType::F64, None, "the largest MR"),
                column("max_magnetoresistance_field_T", ColumnType::F64, Some("T"), "the field of the largest MR"),
                column("rho0_ohm_sq", F64, Some("ohm_sq"), "zero-field sheet resistivity, with _unc"),
                column("magnetoresistance_at_max_field", F64, None, "MR at the largest field"),
                single_field_sign_key(),
            ],
            figures: crate::figures::ratio(),
            ..Default::default()
        }
    }

    fn run(params: RatioParams, inputs: &Inputs, _host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweep = single_sweep(inputs.required("sweep")?, &params.sweep.grouping())?;
        let settings = ratio_settings(&params.sweep, &params.zero)?;
        let curve = magnetoresistance(&sweep.points, &settings).map_err(|e| invalid(e.to_string()))?;
        let points = &curve.points;
        let table = frame(
            points.len(),
            vec![
                floats("field_T", points.iter().map(|p| p.field_t).collect()),
                floats("rho_xx_ohm_sq", points.iter().map(|p| p.rho_xx_ohm_sq).collect()),
                optional(
                    "rho_xx_ohm_sq_unc",
                    points.iter().map(|p| p.rho_xx_unc_ohm_sq).collect(),
                ),
                floats("magnetoresistance", points.iter().map(|p| p.mr).collect()),
                optional("magnetoresistance_unc", points.iter().map(|p| p.mr_unc).collect()),
            ],
        )?;
        let mut output = AnalysisOutput::new(table);
        let summary = &mut output.summary;
        summary.extend(sweep.identity());
        summary.insert("rho0_ohm_sq".into(), json!(curve.zero_field.rho_ohm_sq));
        summary.insert("rho0_ohm_sq_unc".into(), json!(curve.zero_field.rho_unc_ohm_sq));
        summary.insert("rho0_method".into(), json!(curve.zero_field.method));
        summary.insert("max_field_T".into(), json!(curve.max_field_t));
        summary.insert("magnetoresistance_at_max_field".into(), json!(curve.mr_at_max_field));
        summary.insert("max_magnetoresistance".into(), json!(curve.max_mr));
        summary.insert("max_magnetoresistance_field_T".into(), json!(curve.max_mr_field_t));
        summary.insert("single_field_sign".into(), json!(curve.single_field_sign));
        output.warnings = sweep.warnings.clone();
        output.warnings.extend(curve.warnings.iter().cloned());
        Ok(output)
    }
}

// ---------------------------------------------------------------------------------------
// mr.kohler

pub struct KohlerAnalysis;

#[derive(Debug, Deserialize, schemars::JsonSchema)]
pub struct KohlerParams {
    #[serde(flatten)]
    sweep: SweepParams,
    #[serde(flatten)]
    zero: ZeroFieldParams,
    #[serde(default)]
    tolerance: Option<f64>,
    #[serde(default)]
    grid_points: Option<usize>,
}

impl Analysis for KohlerAnalysis {
    const NAME: &'static str = "mr.kohler";
    type Params = KohlerParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let defaults = KohlerSettings::default();
        let mut properties = sweep_schema_properties();
        zero_field_properties(&mut properties);
        properties.insert("tolerance".into(), json!({"type": "number", "exclusiveMinimum": 0, "default": defaults.tolerance, "description": "largest spread of ln MR between temperatures, beyond the noise, at which the curves still collapse"}));
        properties.insert("grid_points".into(), json!({"type": "integer", "minimum": 3, "maximum": 1000, "default": defaults.grid_points, "description": "points of the common log grid in B / rho(0)"}));
        AnalysisDeclaration {
            name: String::new(),
            summary: "Kohler plot: MR against B / rho(0) across temperatures, and whether (and where) the curves collapse".into(),
            description: "Each temperature's MR curve is resampled on a common logarithmic grid of x = B / rho(0) over the overlapping range; at each grid point the spread of ln MR between temperatures beyond what their noise explains is compared with the tolerance. Kohler's rule holds where it stays below; failing ranges and the most deviating temperature are reported, with a power law MR = a x^n per temperature.".into(),
            params: schema(properties),
            inputs: vec![sweep_role(true)],
            outputs: vec![
                column("temperature_K", F64, Some("K"), "temperature of the curve"),
                column("field_T", F64, Some("T"), "|B|"),
                column("x_T_per_ohm", F64, None, "B / rho(0), T/ohm"),
                column("magnetoresistance", F64, None, "(rho(B) - rho(0)) / rho(0)"),
                column("magnetoresistance_unc", F64, None, "standard uncertainty"),
                column("used", Bool, None, "inside the common range"),
            ],
            summary_keys: vec![
                column("sample", ColumnType::Str, None, "the series' sample"),
                column("temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures of the series"),
                column("tolerance", ColumnType::F64, None, "the collapse tolerance used"),
                column("rms_spread", ColumnType::F64, None, "rms spread of ln MR between temperatures"),
                column("max_excess_spread", ColumnType::F64, None, "largest spread beyond the noise"),
                column("max_excess_x_T_per_ohm", ColumnType::F64, Some("T_per_ohm"), "B / rho(0) of the largest excess spread"),
                column("most_deviating_temperature_K", ColumnType::F64, Some("K"), "the temperature that deviates most"),
                column("failing_ranges", ColumnType::Str, None, "list of the x ranges where the collapse fails"),
                column("power_laws", ColumnType::Str, None, "list of {temperature_K, exponent, ...}: MR ~ x^exponent per temperature"),
                column("single_field_sign_temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures measured at one field sign"),
                column("kohler_holds", Bool, None, "the curves collapse within the tolerance (null when nothing could be judged)"),
                column("rms_excess_spread", F64, None, "rms spread of ln MR beyond the noise"),
                single_field_sign_key(),
            ],
            figures: crate::figures::kohler(),
            ..Default::default()
        }
    }

    fn run(params: KohlerParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweeps = sweeps_by_temperature(inputs.required("sweep")?, &params.sweep.grouping())?;
        let ratio = ratio_settings(&params.sweep, &params.zero)?;
        let mut curves = Vec::with_capacity(sweeps.len());
        let mut sweep_warnings: Vec<String> = Vec::new();
        let mut single_sign_temperatures: Vec<f64> = Vec::new();
        for sweep in &sweeps {
            host.check_cancelled()?;
            let temperature = sweep
                .temperature_k
                .ok_or_else(|| invalid("mr.kohler needs temperature_K: one curve per temperature"))?;
            let curve = magnetoresistance(&sweep.points, &ratio)
                .map_err(|e| invalid(format!("sweep at {temperature} K: {e}")))?;
            if curve.single_field_sign {
                single_sign_temperatures.push(temperature);
            }
            sweep_warnings.extend(sweep.warnings.iter().cloned());
            sweep_warnings.extend(
                curve
                    .warnings
                    .iter()
                    .filter(|w| !w.starts_with("single_field_sign"))
                    .map(|w| format!("sweep at {temperature} K: {w}")),
            );
            curves.push(KohlerCurve::from_ratio(temperature, &curve));
        }
        let mut settings = KohlerSettings::default();
        if let Some(tolerance) = params.tolerance {
            settings.tolerance = tolerance;
        }
        if let Some(points) = params.grid_points {
            settings.grid_points = points;
        }
        let analysis = kohler(&curves, &settings).map_err(|e| invalid(e.to_string()))?;
        let points = &analysis.points;
        let table = frame(
            points.len(),
            vec![
                floats("temperature_K", points.iter().map(|p| p.temperature_k).collect()),
                floats("field_T", points.iter().map(|p| p.field_t).collect()),
                floats("x_T_per_ohm", points.iter().map(|p| p.x_t_per_ohm).collect()),
                floats("magnetoresistance", points.iter().map(|p| p.mr).collect()),
                optional("magnetoresistance_unc", points.iter().map(|p| p.mr_unc).collect()),
                Column::new("used".into(), points.iter().map(|p| p.used).collect::<Vec<bool>>()),
            ],
        )?;
        let mut output = AnalysisOutput::new(table);
        let summary = &mut output.summary;
        if let Some(sample) = &sweeps[0].sample {
            summary.insert("sample".into(), json!(sample));
        }
        summary.insert(
            "temperatures_K".into(),
            json!(curves.iter().map(|c| c.temperature_k).collect::<Vec<_>>()),
        );
        summary.insert("kohler_holds".into(), json!(analysis.holds));
        summary.insert("tolerance".into(), json!(analysis.tolerance));
        summary.insert("rms_spread".into(), json!(analysis.rms_spread));
        summary.insert("rms_excess_spread".into(), json!(analysis.rms_excess_spread));
        summary.insert("max_excess_spread".into(), json!(analysis.max_excess_spread));
        summary.insert("max_excess_x_T_per_ohm".into(), json!(analysis.max_excess_x_t_per_ohm));
        summary.insert(
            "most_deviating_temperature_K".into(),
            json!(analysis.most_deviating_temperature_k),
        );
        summary.insert(
            "failing_ranges".into(),
            Value::Array(
                analysis
                    .failures
                    .iter()
                    .map(|f| {
                        json!({"x_low_T_per_ohm": f.x_low_t_per_ohm, "x_high_T_per_ohm": f.x_high_t_per_ohm,
                               "max_excess_spread": f.max_excess_spread, "worst_temperature_K": f.worst_temperature_k})
                    })
                    .collect(),
            ),
        );
        summary.insert(
            "power_laws".into(),
            Value::Array(
                analysis
                    .power_laws
                    .iter()
                    .flatten()
                    .map(|p| {
                        json!({"temperature_K": p.temperature_k, "exponent": p.exponent, "exponent_unc": p.exponent_unc,
                               "prefactor": p.prefactor, "prefactor_unc": p.prefactor_unc})
                    })
                    .collect(),
            ),
        );
        report_series_field_signs(&mut output, &single_sign_temperatures, sweep_warnings);
        output.warnings.extend(analysis.warnings.iter().cloned());
        Ok(output)
    }
}

// ---------------------------------------------------------------------------------------
// mr.two_band_fit

pub struct TwoBandAnalysis;

#[derive(Debug, Deserialize, schemars::JsonSchema)]
pub struct TwoBandParams {
    #[serde(flatten)]
    sweep: SweepParams,
    #[serde(default)]
    carriers: Option<Vec<String>>,
    #[serde(default)]
    random_starts: Option<usize>,
    #[serde(default)]
    seed: Option<u64>,
}

impl Analysis for TwoBandAnalysis {
    const NAME: &'static str = "mr.two_band_fit";
    type Params = TwoBandParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let mut properties = sweep_schema_properties();
        properties.insert("carriers".into(), json!({"type": "array", "items": {"type": "string", "enum": ["n", "p"]}, "minItems": 2, "maxItems": 2, "default": ["n", "p"], "description": "the kinds of the two bands"}));
        properties.insert(
            "random_starts".into(),
            json!({"type": "integer", "minimum": 0, "maximum": 200, "default": 8}),
        );
        properties.insert("seed".into(), json!({"type": "integer", "minimum": 0, "default": 1}));
        AnalysisDeclaration {
            name: String::new(),
            summary: "Classical two-band model fitted jointly to rho_xx(B) and rho_xy(B): two sheet densities and mobilities with uncertainties".into(),
            description: "rho_xx = [(n mu_n + p mu_p) + (n mu_n mu_p^2 + p mu_p mu_n^2) B^2] / (e D), rho_xy = B [(p mu_p^2 - n mu_n^2) + (p - n) mu_n^2 mu_p^2 B^2] / (e D), D = (n mu_n + p mu_p)^2 + (p - n)^2 mu_n^2 mu_p^2 B^2 (for a hole and an electron band; any pair of kinds is allowed), fitted in resistivity space from many starts, weighted by the uncertainties. For two carriers it agrees with spectrum.multi_carrier_fit, which fits the same model in conductivity space.".into(),
            params: schema(properties),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                column("field_T", F64, Some("T"), "|B|"),
                column("rho_xx_ohm_sq", F64, Some("ohm_sq"), "symmetrized data"),
                column("rho_xy_ohm", F64, Some("ohm"), "antisymmetrized data"),
                column("rho_xx_fit_ohm_sq", F64, Some("ohm_sq"), "model"),
                column("rho_xy_fit_ohm", F64, Some("ohm"), "model"),
                column("residual_xx", F64, None, "whitened residual"),
                column("residual_xy", F64, None, "whitened residual"),
            ],
            summary_keys: vec![
                column("sample", ColumnType::Str, None, "the sweep's sample"),
                column("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                column("chi_square", ColumnType::F64, None, "chi^2 of the fit"),
                column("degrees_of_freedom", ColumnType::I64, None, "points minus fitted parameters"),
                column("zero_field_rho_ohm_sq", ColumnType::F64, Some("ohm_sq"), "rho_xx(0) of the fitted bands"),
                column("low_field_hall_coefficient_m2_per_C", ColumnType::F64, Some("m2_per_C"), "R_H(B -> 0) of the fitted bands"),
                column("high_field_hall_coefficient_m2_per_C", ColumnType::F64, Some("m2_per_C"), "R_H(B -> infinity) of the fitted bands"),
                column("carriers", Str, None, "list of {carrier_type, sheet_density_m2, mobility_m2_per_Vs} with _unc"),
                column("reduced_chi_square", F64, None, "chi^2 / nu of the fit"),
                column("chi_square_p_value", F64, None, "P(chi^2 >= observed) when the sweep's uncertainties weight the fit, else null"),
                column("birge_ratio", F64, None, "sqrt(chi^2 / nu) when above 1 (the uncertainties were multiplied by it), else 1; null without stated uncertainties"),
                single_field_sign_key(),
            ],
            figures: crate::figures::two_band_fit(),
            ..Default::default()
        }
    }

    fn run(params: TwoBandParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweep = single_sweep(inputs.required("sweep")?, &params.sweep.grouping())?;
        let mut settings = TwoBandSettings::default();
        if let Some(kinds) = &params.carriers {
            let parse = |k: &str| CarrierKind::from_code(k).map_err(invalid);
            match kinds.as_slice() {
                [a, b] => settings.kinds = [parse(a)?, parse(b)?],
                _ => return Err(invalid("carriers must name exactly two bands, e.g. [\"n\", \"p\"]")),
            }
        }
        if let Some(starts) = params.random_starts {
            settings.random_starts = starts;
        }
        if let Some(seed) = params.seed {
            settings.seed = seed;
        }
        host.check_cancelled()?;
        let result =
            fit_two_band_sweep(&sweep.points, &params.sweep.settings(), &settings).map_err(|error| match error {
                TwoBandError::NotConverged { .. } | TwoBandError::Fit(_) => AnalysisError::Numerical(error.to_string()),
                other => invalid(other.to_string()),
            })?;
        let fit = &result.fit;
        let curve = &fit.curve;
        let table = frame(
            curve.len(),
            vec![
                floats("field_T", curve.iter().map(|p| p.field_t).collect()),
                floats("rho_xx_ohm_sq", curve.iter().map(|p| p.rho_xx_ohm_sq).collect()),
                floats("rho_xy_ohm", curve.iter().map(|p| p.rho_xy_ohm).collect()),
                floats("rho_xx_fit_ohm_sq", curve.iter().map(|p| p.rho_xx_fit_ohm_sq).collect()),
                floats("rho_xy_fit_ohm", curve.iter().map(|p| p.rho_xy_fit_ohm).collect()),
                floats("residual_xx", curve.iter().map(|p| p.residual_xx).collect()),
                optional("residual_xy", curve.iter().map(|p| p.residual_xy).collect()),
            ],
        )?;
        let mut output = AnalysisOutput::new(table);
        let summary = &mut output.summary;
        summary.extend(sweep.identity());
        summary.insert(
            "carriers".into(),
            Value::Array(
                fit.carriers
                    .iter()
                    .map(|c| {
                        json!({
                            "carrier_type": c.kind.code(),
                            "sheet_density_m2": c.sheet_density_m2,
                            "sheet_density_m2_unc": c.sheet_density_unc_m2,
                            "mobility_m2_per_Vs": c.mobility_m2_per_vs,
                            "mobility_m2_per_Vs_unc": c.mobility_unc_m2_per_vs,
                            "mobility_field_product": c.mobility_field_product,
                            "at_bound": c.at_bound,
                        })
                    })
                    .collect(),
            ),
        );
        summary.insert("chi_square".into(), json!(fit.chi_square));
        summary.insert("reduced_chi_square".into(), json!(fit.reduced_chi_square));
        summary.insert("chi_square_p_value".into(), json!(fit.chi_square_p_value));
        summary.insert("birge_ratio".into(), json!(fit.birge_ratio));
        summary.insert("degrees_of_freedom".into(), json!(fit.degrees_of_freedom));
        summary.insert("zero_field_rho_ohm_sq".into(), json!(fit.zero_field_rho_ohm_sq));
        summary.insert(
            "low_field_hall_coefficient_m2_per_C".into(),
            json!(fit.low_field_hall_coefficient_m2_per_c),
        );
        summary.insert(
            "high_field_hall_coefficient_m2_per_C".into(),
            json!(fit.high_field_hall_coefficient_m2_per_c),
        );
        summary.insert("single_field_sign".into(), json!(result.symmetrized.single_field_sign));
        output.warnings = sweep.warnings.clone();
        output.warnings.extend(fit.warnings.iter().cloned());
        Ok(output)
    }
}

/// The field-sign report of an analysis of several sweeps (Kohler, oscillations): the
/// `single_field_sign` flag and the temperatures measured at one sign in the summary, and as
/// the first warnings the one series warning followed by the sweeps' own.
pub(super) fn report_series_field_signs(
    output: &mut AnalysisOutput,
    single_sign_temperatures: &[f64],
    sweep_warnings: Vec<String>,
) {
    output
        .summary
        .insert("single_field_sign".into(), json!(!single_sign_temperatures.is_empty()));
    output.summary.insert(
        "single_field_sign_temperatures_K".into(),
        json!(single_sign_temperatures),
    );
    output.warnings = single_field_sign_series_warning(single_sign_temperatures)
        .into_iter()
        .chain(sweep_warnings)
        .collect();
}
