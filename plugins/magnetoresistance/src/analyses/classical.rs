//! `mr.symmetrize`, `mr.ratio`, `mr.kohler` and `mr.two_band_fit`: the classical
//! magnetoresistance analyses.

use crate::kohler::{kohler, KohlerCurve, KohlerSettings};
use crate::ratio::{magnetoresistance, RatioSettings, ZeroFieldResistivity, DEFAULT_EXTRAPOLATION_POINTS};
use crate::symmetrize::{symmetrize_sweep, SymmetrizeOptions};
use crate::two_band::{fit_two_band_sweep, TwoBandError, TwoBandSettings};
use mobilis_physics::forward::tensor::CarrierKind;
use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType};
use mobilis_sdk::choices::CarrierChoice;
use mobilis_sdk::sdk::{invalid, Analysis, AnalysisError, AnalysisOutput, Host, Inputs, OutputBuilder};
use mobilis_sdk::sweep_table::{
    repeat_summary, repeat_summary_keys, single_field_sign_series_warning, single_sweep, sweep_role,
    sweeps_by_temperature, SweepParams,
};
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use serde_json::{json, Value};

/// The summary key every analysis of a sweep carries.
pub(crate) fn single_field_sign_key() -> ColumnSpec {
    ColumnSpec::new(
        "single_field_sign",
        ColumnType::Bool,
        None,
        "true when the sweep had one field sign and was used as measured, not symmetrized (contact misalignment not removed)",
    )
}

/// `keys` and the counts of merged repeated readings ([`repeat_summary_keys`]), which every
/// analysis of symmetrized sweeps reports.
pub(crate) fn with_repeat_keys(mut keys: Vec<ColumnSpec>) -> Vec<ColumnSpec> {
    keys.extend(repeat_summary_keys());
    keys
}

/// Where rho(0) comes from: the `zero_field` parameter of `mr.ratio` and `mr.kohler`.
// Serialize so that the derived schema can state the default choice.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum ZeroFieldSource {
    /// the mean of the points at |B| <= zero_field_tolerance_T
    #[default]
    Measured,
    /// rho(0) + c B^2 fitted to the lowest fields, for a sweep without a zero-field point
    Extrapolated,
}

/// The rho(0) parameters of `mr.ratio` and `mr.kohler` (flattened into theirs).
#[derive(Debug, Clone, Deserialize, JsonSchema)]
pub struct ZeroFieldParams {
    /// rho(0) from the points at zero field, or extrapolated quadratically from the lowest
    /// fields when there is none
    #[serde(default)]
    zero_field: ZeroFieldSource,
    /// lowest-field points of the quadratic extrapolation
    #[serde(default = "ZeroFieldParams::default_extrapolation_points")]
    #[schemars(range(min = 3))]
    extrapolation_points: usize,
}

impl ZeroFieldParams {
    fn default_extrapolation_points() -> usize {
        DEFAULT_EXTRAPOLATION_POINTS
    }

    /// The ratio settings of these parameters over the sweep's symmetrization.
    fn ratio_settings(&self, sweep: &SweepParams) -> RatioSettings {
        let zero_field = match self.zero_field {
            ZeroFieldSource::Measured => ZeroFieldResistivity::Measured,
            ZeroFieldSource::Extrapolated => ZeroFieldResistivity::Extrapolated {
                points: self.extrapolation_points,
                max_field_t: None,
            },
        };
        RatioSettings {
            sweep: sweep.settings(),
            zero_field,
        }
    }
}

// ---------------------------------------------------------------------------------------
// mr.symmetrize

pub struct SymmetrizeAnalysis;

/// Parameters of `mr.symmetrize`.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct SymmetrizeParams {
    #[serde(flatten)]
    sweep: SweepParams,
    /// estimate the contact misalignment from points up to this field; default the lower
    /// quarter of the overlap
    // Not given means the lower quarter of the overlap, which depends on the sweep, so there
    // is no default value to state, and null is not a field: the schema says number.
    #[serde(rename = "misalignment_max_field_T", default)]
    #[schemars(with = "f64", extend("exclusiveMinimum" = 0), transform = without_default)]
    misalignment_max_field_t: Option<f64>,
}

/// Drops the `default` schemars writes for an optional parameter (null), where not given
/// means something of its own that the description states.
fn without_default(schema: &mut schemars::Schema) {
    schema.remove("default");
}

impl Analysis for SymmetrizeAnalysis {
    const NAME: &'static str = "mr.symmetrize";
    type Params = SymmetrizeParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Even part of rho_xx and odd part of rho_xy of a sweep, with the residual asymmetry (a measure of contact misalignment)".into(),
            description: "Each field branch is interpolated onto the common |B| points of the overlap; rho_xx(|B|) = (rho_xx(+B) + rho_xx(-B))/2, rho_xy(|B|) = (rho_xy(+B) - rho_xy(-B))/2. The removed parts (odd in rho_xx, even in rho_xy) are reported point by point and summarised as a misalignment fraction rho_xy_even / rho_xx and a Hall pickup in rho_xx.".into(),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                ColumnSpec::new("field_T", F64, Some("T"), "|B|"),
                ColumnSpec::new("rho_xx_ohm_sq", F64, Some("ohm_sq"), "even part"),
                ColumnSpec::new("rho_xx_ohm_sq_unc", F64, Some("ohm_sq"), "standard uncertainty"),
                ColumnSpec::new("rho_xy_ohm", F64, Some("ohm"), "odd part, positive for holes"),
                ColumnSpec::new("rho_xy_ohm_unc", F64, Some("ohm"), "standard uncertainty"),
                ColumnSpec::new("rho_xx_odd_ohm_sq", F64, Some("ohm_sq"), "the removed odd part of rho_xx"),
                ColumnSpec::new("rho_xy_even_ohm", F64, Some("ohm"), "the removed even part of rho_xy"),
                ColumnSpec::new("rho_xx_asymmetry", F64, None, "removed part relative to rho_xx"),
                ColumnSpec::new("rho_xy_asymmetry", F64, None, "removed part relative to rho_xy"),
            ],
            summary_keys: with_repeat_keys(vec![
                ColumnSpec::new("sample", ColumnType::Str, None, "the sweep's sample"),
                ColumnSpec::new("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                ColumnSpec::new("hall_pickup_fraction", ColumnType::F64, None, "part of rho_xx picked up in rho_xy, with _unc"),
                ColumnSpec::new("max_rho_xx_asymmetry", ColumnType::F64, None, "largest removed odd part relative to rho_xx"),
                ColumnSpec::new("overlap_T", ColumnType::F64, Some("T"), "[lowest, highest] |B| where both field signs were measured"),
                ColumnSpec::new("points_outside_overlap", ColumnType::I64, None, "points outside the overlap of the field signs"),
                ColumnSpec::new("misalignment_fraction", F64, None, "rho_xy_even / rho_xx at low field, with _unc"),
                ColumnSpec::new("max_rho_xy_asymmetry", F64, None, "largest removed even part relative to rho_xy"),
            ]),
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
        let mut output = OutputBuilder::of::<Self>();
        output
            .f64("field_T", rows.iter().map(|r| r.field_t).collect())
            .f64("rho_xx_ohm_sq", rows.iter().map(|r| r.rho_xx_ohm_sq).collect())
            .f64_nullable("rho_xx_ohm_sq_unc", rows.iter().map(|r| r.rho_xx_unc_ohm_sq).collect())
            .f64("rho_xy_ohm", rows.iter().map(|r| r.rho_xy_ohm).collect())
            .f64_nullable("rho_xy_ohm_unc", rows.iter().map(|r| r.rho_xy_unc_ohm).collect())
            .f64("rho_xx_odd_ohm_sq", rows.iter().map(|r| r.rho_xx_odd_ohm_sq).collect())
            .f64("rho_xy_even_ohm", rows.iter().map(|r| r.rho_xy_even_ohm).collect())
            .f64("rho_xx_asymmetry", rows.iter().map(|r| r.rho_xx_asymmetry).collect())
            .f64("rho_xy_asymmetry", rows.iter().map(|r| r.rho_xy_asymmetry).collect())
            .summary_map(sweep.identity());
        let s = &result.summary;
        output
            .summary("misalignment_fraction", s.misalignment.fraction)
            .summary("misalignment_fraction_unc", s.misalignment.fraction_unc);
        if let Some(pickup) = &s.hall_pickup {
            output
                .summary("hall_pickup_fraction", pickup.fraction)
                .summary("hall_pickup_fraction_unc", pickup.fraction_unc);
        }
        output
            .summary("max_rho_xx_asymmetry", s.max_rho_xx_asymmetry)
            .summary("max_rho_xy_asymmetry", s.max_rho_xy_asymmetry)
            .summary("overlap_T", [s.overlap_t.0, s.overlap_t.1])
            .summary("points_outside_overlap", s.points_outside_overlap)
            .summary_map(repeat_summary([&result.symmetrized.repeats]))
            .warnings(sweep.warnings.iter().cloned())
            .warnings(result.warnings.iter().cloned());
        output.finish(rows.len())
    }
}

// ---------------------------------------------------------------------------------------
// mr.ratio

pub struct RatioAnalysis;

/// Parameters of `mr.ratio`.
#[derive(Debug, Deserialize, JsonSchema)]
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
        AnalysisDeclaration {
            name: String::new(),
            summary: "Magnetoresistance (rho(B) - rho(0)) / rho(0) of a symmetrized sweep, rho(0) from the data at zero field".into(),
            description: "rho_xx is symmetrized first (a sweep at one field sign is used as measured, rho_xx being even in B, and flagged single_field_sign); rho(0) is the mean of the zero-field points (|B| <= zero_field_tolerance_T) (or, with zero_field: extrapolated, a quadratic fit to the lowest fields). Uncertainties propagate when the sweep has them.".into(),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                ColumnSpec::new("field_T", F64, Some("T"), "|B|"),
                ColumnSpec::new("rho_xx_ohm_sq", F64, Some("ohm_sq"), "symmetrized rho_xx"),
                ColumnSpec::new("rho_xx_ohm_sq_unc", F64, Some("ohm_sq"), "standard uncertainty"),
                ColumnSpec::new("magnetoresistance", F64, None, "(rho(B) - rho(0)) / rho(0)"),
                ColumnSpec::new("magnetoresistance_unc", F64, None, "standard uncertainty: propagated from rho_xx_ohm_sq_unc, or estimated from the curve's scatter (see estimated_uncertainty_temperatures_K)"),
            ],
            summary_keys: with_repeat_keys(vec![
                ColumnSpec::new("sample", ColumnType::Str, None, "the sweep's sample"),
                ColumnSpec::new("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                ColumnSpec::new("rho0_method", ColumnType::Str, None, "how rho(0) was obtained"),
                ColumnSpec::new("max_field_T", ColumnType::F64, Some("T"), "the largest |B|"),
                ColumnSpec::new("max_magnetoresistance", ColumnType::F64, None, "the largest MR"),
                ColumnSpec::new("max_magnetoresistance_field_T", ColumnType::F64, Some("T"), "the field of the largest MR"),
                ColumnSpec::new("rho0_ohm_sq", F64, Some("ohm_sq"), "zero-field sheet resistivity, with _unc"),
                ColumnSpec::new("magnetoresistance_at_max_field", F64, None, "MR at the largest field"),
                single_field_sign_key(),
            ]),
            figures: crate::figures::ratio(),
            ..Default::default()
        }
    }

    fn run(params: RatioParams, inputs: &Inputs, _host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweep = single_sweep(inputs.required("sweep")?, &params.sweep.grouping())?;
        let settings = params.zero.ratio_settings(&params.sweep);
        let curve = magnetoresistance(&sweep.points, &settings).map_err(|e| invalid(e.to_string()))?;
        let points = &curve.points;
        let mut output = OutputBuilder::of::<Self>();
        output
            .f64("field_T", points.iter().map(|p| p.field_t).collect())
            .f64("rho_xx_ohm_sq", points.iter().map(|p| p.rho_xx_ohm_sq).collect())
            .f64_nullable(
                "rho_xx_ohm_sq_unc",
                points.iter().map(|p| p.rho_xx_unc_ohm_sq).collect(),
            )
            .f64("magnetoresistance", points.iter().map(|p| p.mr).collect())
            .f64_nullable("magnetoresistance_unc", points.iter().map(|p| p.mr_unc).collect())
            .summary_map(sweep.identity())
            .summary("rho0_ohm_sq", curve.zero_field.rho_ohm_sq)
            .summary("rho0_ohm_sq_unc", curve.zero_field.rho_unc_ohm_sq)
            .summary("rho0_method", curve.zero_field.method)
            .summary("max_field_T", curve.max_field_t)
            .summary("magnetoresistance_at_max_field", curve.mr_at_max_field)
            .summary("max_magnetoresistance", curve.max_mr)
            .summary("max_magnetoresistance_field_T", curve.max_mr_field_t)
            .summary("single_field_sign", curve.single_field_sign)
            .summary_map(repeat_summary([&curve.symmetrized.repeats]))
            .warnings(sweep.warnings.iter().cloned())
            .warnings(curve.warnings.iter().cloned());
        output.finish(points.len())
    }
}

// ---------------------------------------------------------------------------------------
// mr.kohler

pub struct KohlerAnalysis;

/// Parameters of `mr.kohler`.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct KohlerParams {
    #[serde(flatten)]
    sweep: SweepParams,
    #[serde(flatten)]
    zero: ZeroFieldParams,
    /// largest spread of ln MR between temperatures, beyond the noise, at which the curves
    /// still collapse
    #[serde(default = "KohlerParams::default_tolerance")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    tolerance: f64,
    /// points of the common log grid in B / rho(0)
    #[serde(default = "KohlerParams::default_grid_points")]
    #[schemars(range(min = 3, max = 1000))]
    grid_points: usize,
}

impl KohlerParams {
    fn default_tolerance() -> f64 {
        KohlerSettings::default().tolerance
    }

    fn default_grid_points() -> usize {
        KohlerSettings::default().grid_points
    }

    fn settings(&self) -> KohlerSettings {
        KohlerSettings {
            tolerance: self.tolerance,
            grid_points: self.grid_points,
            ..KohlerSettings::default()
        }
    }
}

impl Analysis for KohlerAnalysis {
    const NAME: &'static str = "mr.kohler";
    type Params = KohlerParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Kohler plot: MR against B / rho(0) across temperatures, and whether (and where) the curves collapse".into(),
            description: "Each temperature's MR curve is resampled on a common logarithmic grid of x = B / rho(0) over the overlapping range; at each grid point the spread of ln MR between temperatures beyond what their noise explains is compared with the tolerance. Kohler's rule holds where it stays below; failing ranges and the most deviating temperature are reported, with a power law MR = a x^n per temperature.".into(),
            inputs: vec![sweep_role(true)],
            outputs: vec![
                ColumnSpec::new("temperature_K", F64, Some("K"), "temperature of the curve"),
                ColumnSpec::new("field_T", F64, Some("T"), "|B|"),
                ColumnSpec::new("x_T_per_ohm", F64, None, "B / rho(0), T/ohm"),
                ColumnSpec::new("magnetoresistance", F64, None, "(rho(B) - rho(0)) / rho(0)"),
                ColumnSpec::new("magnetoresistance_unc", F64, None, "standard uncertainty: propagated from rho_xx_ohm_sq_unc, or estimated from the curve's scatter (see estimated_uncertainty_temperatures_K)"),
                ColumnSpec::new("used", Bool, None, "inside the common range"),
            ],
            summary_keys: with_repeat_keys(vec![
                ColumnSpec::new("sample", ColumnType::Str, None, "the series' sample"),
                ColumnSpec::new("temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures of the series"),
                ColumnSpec::new("tolerance", ColumnType::F64, None, "the collapse tolerance used"),
                ColumnSpec::new("rms_spread", ColumnType::F64, None, "rms spread of ln MR between temperatures"),
                ColumnSpec::new("max_excess_spread", ColumnType::F64, None, "largest spread beyond the noise"),
                ColumnSpec::new("max_excess_x_T_per_ohm", ColumnType::F64, Some("T_per_ohm"), "B / rho(0) of the largest excess spread"),
                ColumnSpec::new("most_deviating_temperature_K", ColumnType::F64, Some("K"), "the temperature that deviates most"),
                ColumnSpec::new("failing_ranges", ColumnType::Str, None, "list of the x ranges where the collapse fails"),
                ColumnSpec::new("power_laws", ColumnType::Str, None, "list of {temperature_K, exponent, ...}: MR ~ x^exponent per temperature"),
                ColumnSpec::new("single_field_sign_temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures measured at one field sign"),
                ColumnSpec::new("kohler_holds", Bool, None, "the curves collapse within the tolerance (null when nothing could be judged)"),
                ColumnSpec::new("rms_excess_spread", F64, None, "rms spread of ln MR beyond the noise"),
                ColumnSpec::new("estimated_uncertainty_temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures whose sweeps had no rho_xx_ohm_sq_unc: their MR uncertainties were estimated from each curve's own scatter"),
                single_field_sign_key(),
            ]),
            figures: crate::figures::kohler(),
            ..Default::default()
        }
    }

    fn run(params: KohlerParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweeps = sweeps_by_temperature(inputs.required("sweep")?, &params.sweep.grouping())?;
        let ratio = params.zero.ratio_settings(&params.sweep);
        let mut curves = Vec::with_capacity(sweeps.len());
        let mut sweep_warnings: Vec<String> = Vec::new();
        let mut single_sign_temperatures: Vec<f64> = Vec::new();
        let mut repeats = Vec::with_capacity(sweeps.len());
        for sweep in &sweeps {
            host.check_cancelled()?;
            let temperature = sweep
                .temperature_k
                .ok_or_else(|| invalid("mr.kohler needs temperature_K: one curve per temperature"))?;
            let curve = magnetoresistance(&sweep.points, &ratio).map_err(|e| {
                invalid(format!(
                    "sweep at {} K: {e}",
                    mobilis_physics::units::format_number(temperature)
                ))
            })?;
            if curve.single_field_sign {
                single_sign_temperatures.push(temperature);
            }
            sweep_warnings.extend(sweep.warnings.iter().cloned());
            sweep_warnings.extend(
                curve
                    .warnings
                    .iter()
                    .filter(|w| !w.starts_with("single_field_sign"))
                    .map(|w| format!("sweep at {} K: {w}", mobilis_physics::units::format_number(temperature))),
            );
            curves.push(KohlerCurve::from_ratio(temperature, &curve));
            repeats.push(curve.symmetrized.repeats);
        }
        let analysis = kohler(&curves, &params.settings()).map_err(|e| invalid(e.to_string()))?;
        let points = &analysis.points;
        let mut output = OutputBuilder::of::<Self>();
        output
            .f64("temperature_K", points.iter().map(|p| p.temperature_k).collect())
            .f64("field_T", points.iter().map(|p| p.field_t).collect())
            .f64("x_T_per_ohm", points.iter().map(|p| p.x_t_per_ohm).collect())
            .f64("magnetoresistance", points.iter().map(|p| p.mr).collect())
            .f64_nullable("magnetoresistance_unc", points.iter().map(|p| p.mr_unc).collect())
            .bool("used", points.iter().map(|p| p.used).collect());
        if let Some(sample) = &sweeps[0].sample {
            output.summary("sample", sample);
        }
        output
            .summary(
                "temperatures_K",
                curves.iter().map(|c| c.temperature_k).collect::<Vec<_>>(),
            )
            .summary("kohler_holds", analysis.holds)
            .summary(
                "estimated_uncertainty_temperatures_K",
                &analysis.estimated_temperatures_k,
            )
            .summary("tolerance", analysis.tolerance)
            .summary("rms_spread", analysis.rms_spread)
            .summary("rms_excess_spread", analysis.rms_excess_spread)
            .summary("max_excess_spread", analysis.max_excess_spread)
            .summary("max_excess_x_T_per_ohm", analysis.max_excess_x_t_per_ohm)
            .summary("most_deviating_temperature_K", analysis.most_deviating_temperature_k)
            .summary(
                "failing_ranges",
                analysis
                    .failures
                    .iter()
                    .map(|f| {
                        json!({"x_low_T_per_ohm": f.x_low_t_per_ohm, "x_high_T_per_ohm": f.x_high_t_per_ohm,
                               "max_excess_spread": f.max_excess_spread, "worst_temperature_K": f.worst_temperature_k})
                    })
                    .collect::<Vec<Value>>(),
            )
            .summary(
                "power_laws",
                analysis
                    .power_laws
                    .iter()
                    .flatten()
                    .map(|p| {
                        json!({"temperature_K": p.temperature_k, "exponent": p.exponent, "exponent_unc": p.exponent_unc,
                               "prefactor": p.prefactor, "prefactor_unc": p.prefactor_unc})
                    })
                    .collect::<Vec<Value>>(),
            );
        output.summary_map(repeat_summary(&repeats));
        series_field_signs(&mut output, &single_sign_temperatures, sweep_warnings);
        output.warnings(analysis.warnings.iter().cloned());
        output.finish(points.len())
    }
}

// ---------------------------------------------------------------------------------------
// mr.two_band_fit

pub struct TwoBandAnalysis;

/// Parameters of `mr.two_band_fit`.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct TwoBandParams {
    #[serde(flatten)]
    sweep: SweepParams,
    /// the kinds of the two bands
    #[serde(default = "TwoBandParams::default_carriers")]
    carriers: [CarrierChoice; 2],
    /// random starts of the fit besides the deterministic ones
    #[serde(default = "TwoBandParams::default_random_starts")]
    #[schemars(range(max = 200))]
    random_starts: usize,
    /// seed of the random starts (the same seed gives the same fit)
    #[serde(default = "TwoBandParams::default_seed")]
    seed: u64,
}

impl TwoBandParams {
    fn default_carriers() -> [CarrierChoice; 2] {
        TwoBandSettings::default().kinds.map(CarrierChoice::from)
    }

    fn default_random_starts() -> usize {
        TwoBandSettings::default().random_starts
    }

    fn default_seed() -> u64 {
        TwoBandSettings::default().seed
    }

    fn settings(&self) -> TwoBandSettings {
        TwoBandSettings {
            kinds: self.carriers.map(CarrierKind::from),
            random_starts: self.random_starts,
            seed: self.seed,
            ..TwoBandSettings::default()
        }
    }
}

impl Analysis for TwoBandAnalysis {
    const NAME: &'static str = "mr.two_band_fit";
    type Params = TwoBandParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Classical two-band model fitted jointly to rho_xx(B) and rho_xy(B): two sheet densities and mobilities with uncertainties".into(),
            description: "rho_xx = [(n mu_n + p mu_p) + (n mu_n mu_p^2 + p mu_p mu_n^2) B^2] / (e D), rho_xy = B [(p mu_p^2 - n mu_n^2) + (p - n) mu_n^2 mu_p^2 B^2] / (e D), D = (n mu_n + p mu_p)^2 + (p - n)^2 mu_n^2 mu_p^2 B^2 (for a hole and an electron band; any pair of kinds is allowed), fitted in resistivity space from many starts, weighted by the uncertainties. For two carriers it agrees with spectrum.multi_carrier_fit, which fits the same model in conductivity space.".into(),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                ColumnSpec::new("field_T", F64, Some("T"), "|B|"),
                ColumnSpec::new("rho_xx_ohm_sq", F64, Some("ohm_sq"), "symmetrized data"),
                ColumnSpec::new("rho_xy_ohm", F64, Some("ohm"), "antisymmetrized data"),
                ColumnSpec::new("rho_xx_fit_ohm_sq", F64, Some("ohm_sq"), "model"),
                ColumnSpec::new("rho_xy_fit_ohm", F64, Some("ohm"), "model"),
                ColumnSpec::new("residual_xx", F64, None, "whitened residual"),
                ColumnSpec::new("residual_xy", F64, None, "whitened residual"),
            ],
            summary_keys: with_repeat_keys(vec![
                ColumnSpec::new("sample", ColumnType::Str, None, "the sweep's sample"),
                ColumnSpec::new("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                ColumnSpec::new("chi_square", ColumnType::F64, None, "chi^2 of the fit"),
                ColumnSpec::new("degrees_of_freedom", ColumnType::I64, None, "points minus fitted parameters"),
                ColumnSpec::new("zero_field_rho_ohm_sq", ColumnType::F64, Some("ohm_sq"), "rho_xx(0) of the fitted bands"),
                ColumnSpec::new("low_field_hall_coefficient_m2_per_C", ColumnType::F64, Some("m2_per_C"), "R_H(B -> 0) of the fitted bands"),
                ColumnSpec::new("high_field_hall_coefficient_m2_per_C", ColumnType::F64, Some("m2_per_C"), "R_H(B -> infinity) of the fitted bands"),
                ColumnSpec::new("carriers", Str, None, "list of {carrier_type, sheet_density_m2, mobility_m2_per_Vs} with _unc"),
                ColumnSpec::new("reduced_chi_square", F64, None, "chi^2 / nu against the stated uncertainties; null when the data carry none (the residuals then set the noise scale, and chi-square tests nothing)"),
                ColumnSpec::new("chi_square_p_value", F64, None, "P(chi^2 >= observed) when the sweep's uncertainties weight the fit, else null"),
                ColumnSpec::new("birge_ratio", F64, None, "sqrt(chi^2 / nu) when above 1 (the uncertainties were multiplied by it), else 1; null without stated uncertainties"),
                single_field_sign_key(),
            ]),
            figures: crate::figures::two_band_fit(),
            ..Default::default()
        }
    }

    fn run(params: TwoBandParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let sweep = single_sweep(inputs.required("sweep")?, &params.sweep.grouping())?;
        let settings = params.settings();
        host.check_cancelled()?;
        let result =
            fit_two_band_sweep(&sweep.points, &params.sweep.settings(), &settings).map_err(|error| match error {
                TwoBandError::NotConverged { .. } | TwoBandError::Fit(_) => AnalysisError::Numerical(error.to_string()),
                other => invalid(other.to_string()),
            })?;
        let fit = &result.fit;
        let curve = &fit.curve;
        let mut output = OutputBuilder::of::<Self>();
        output
            .f64("field_T", curve.iter().map(|p| p.field_t).collect())
            .f64("rho_xx_ohm_sq", curve.iter().map(|p| p.rho_xx_ohm_sq).collect())
            .f64("rho_xy_ohm", curve.iter().map(|p| p.rho_xy_ohm).collect())
            .f64("rho_xx_fit_ohm_sq", curve.iter().map(|p| p.rho_xx_fit_ohm_sq).collect())
            .f64("rho_xy_fit_ohm", curve.iter().map(|p| p.rho_xy_fit_ohm).collect())
            .f64("residual_xx", curve.iter().map(|p| p.residual_xx).collect())
            .f64_nullable("residual_xy", curve.iter().map(|p| p.residual_xy).collect())
            .summary_map(sweep.identity())
            .summary(
                "carriers",
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
                    .collect::<Vec<Value>>(),
            )
            .summary("chi_square", fit.chi_square)
            .summary(
                "reduced_chi_square",
                fit.chi_square_p_value.map(|_| fit.reduced_chi_square),
            )
            .summary("chi_square_p_value", fit.chi_square_p_value)
            .summary("birge_ratio", fit.birge_ratio)
            .summary("degrees_of_freedom", fit.degrees_of_freedom)
            .summary("zero_field_rho_ohm_sq", fit.zero_field_rho_ohm_sq)
            .summary(
                "low_field_hall_coefficient_m2_per_C",
                fit.low_field_hall_coefficient_m2_per_c,
            )
            .summary(
                "high_field_hall_coefficient_m2_per_C",
                fit.high_field_hall_coefficient_m2_per_c,
            )
            .summary("single_field_sign", result.symmetrized.single_field_sign)
            .summary_map(repeat_summary([&result.symmetrized.repeats]))
            .warnings(sweep.warnings.iter().cloned())
            .warnings(fit.warnings.iter().cloned());
        output.finish(curve.len())
    }
}

/// The field-sign report of an analysis of several sweeps (Kohler, oscillations): the
/// `single_field_sign` flag and the temperatures measured at one sign in the summary, and as
/// the first warnings the one series warning followed by the sweeps' own.
pub(super) fn series_field_signs(
    output: &mut OutputBuilder,
    single_sign_temperatures: &[f64],
    sweep_warnings: Vec<String>,
) {
    output
        .summary("single_field_sign", !single_sign_temperatures.is_empty())
        .summary("single_field_sign_temperatures_K", single_sign_temperatures)
        .warnings(single_field_sign_series_warning(single_sign_temperatures))
        .warnings(sweep_warnings);
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_sdk::sdk::{declaration_of, run_typed};
    use polars::prelude::{Column, DataFrame};

    /// A symmetric sweep of one electron and one hole band at 10 K.
    fn sweep() -> Inputs {
        use mobilis_physics::forward::tensor::{resistivity_tensor, symmetric_fields, Carrier};
        let carriers = [Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)];
        let fields = symmetric_fields(6.0, 30).unwrap();
        let rho: Vec<_> = fields
            .iter()
            .map(|&b| resistivity_tensor(&carriers, b).unwrap())
            .collect();
        let frame = DataFrame::new(
            fields.len(),
            vec![
                Column::new("temperature_K".into(), vec![10.0; fields.len()]),
                Column::new("field_T".into(), fields.clone()),
                Column::new(
                    "rho_xx_ohm_sq".into(),
                    rho.iter().map(|r| r.rho_xx_ohm_sq).collect::<Vec<_>>(),
                ),
                Column::new(
                    "rho_xy_ohm".into(),
                    rho.iter().map(|r| r.rho_xy_ohm).collect::<Vec<_>>(),
                ),
            ],
        )
        .unwrap();
        Inputs::from_tables([("sweep".to_owned(), frame)])
    }

    fn property(schema: &Value, name: &str) -> Value {
        schema["properties"][name].clone()
    }

    /// The choices a derived enum schema allows (`enum`, or `oneOf` constants).
    fn choices(schema: &Value) -> Vec<Value> {
        if let Some(Value::Array(values)) = schema.get("enum") {
            return values.clone();
        }
        schema["oneOf"]
            .as_array()
            .expect("an enum schema")
            .iter()
            .map(|choice| choice["const"].clone())
            .collect()
    }

    // The derived schemas carry what the host validates before a call: every bound, every
    // enum choice, every default, and no unknown parameter.
    #[test]
    fn derived_schemas_state_bounds_choices_and_defaults() {
        let ratio = declaration_of::<RatioAnalysis>().params;
        assert_eq!(ratio["additionalProperties"], json!(false));
        assert_eq!(
            choices(&property(&ratio, "zero_field")),
            [json!("measured"), json!("extrapolated")]
        );
        assert_eq!(property(&ratio, "zero_field")["default"], json!("measured"));
        assert_eq!(property(&ratio, "extrapolation_points")["minimum"], json!(3));
        assert_eq!(
            property(&ratio, "extrapolation_points")["default"],
            json!(DEFAULT_EXTRAPOLATION_POINTS)
        );
        assert_eq!(property(&ratio, "zero_field_tolerance_T")["minimum"], json!(0));

        let kohler = declaration_of::<KohlerAnalysis>().params;
        assert_eq!(property(&kohler, "tolerance")["exclusiveMinimum"], json!(0));
        assert_eq!(property(&kohler, "tolerance")["default"], json!(0.05));
        assert_eq!(property(&kohler, "grid_points")["minimum"], json!(3));
        assert_eq!(property(&kohler, "grid_points")["maximum"], json!(1000));
        assert_eq!(property(&kohler, "grid_points")["default"], json!(30));
        assert!(kohler["properties"].get("zero_field").is_some());

        let two_band = declaration_of::<TwoBandAnalysis>().params;
        let carriers = property(&two_band, "carriers");
        assert_eq!(
            (carriers["minItems"].clone(), carriers["maxItems"].clone()),
            (json!(2), json!(2))
        );
        assert_eq!(choices(&carriers["items"]), [json!("n"), json!("p")]);
        assert_eq!(carriers["default"], json!(["n", "p"]));
        assert_eq!(property(&two_band, "random_starts")["maximum"], json!(200));
        assert_eq!(property(&two_band, "random_starts")["default"], json!(8));
        assert_eq!(property(&two_band, "seed")["default"], json!(1));

        let symmetrize = declaration_of::<SymmetrizeAnalysis>().params;
        let misalignment = property(&symmetrize, "misalignment_max_field_T");
        assert_eq!(misalignment["type"], json!("number"));
        assert_eq!(misalignment["exclusiveMinimum"], json!(0));
        assert!(misalignment.get("default").is_none(), "{misalignment}");
    }

    // Omitted parameters are the physics settings' defaults.
    #[test]
    fn omitted_parameters_are_the_documented_defaults() {
        let ratio: RatioParams = serde_json::from_str("{}").unwrap();
        assert_eq!(ratio.zero.zero_field, ZeroFieldSource::Measured);
        assert_eq!(ratio.zero.ratio_settings(&ratio.sweep), RatioSettings::default());
        let extrapolated: RatioParams = serde_json::from_str(r#"{"zero_field": "extrapolated"}"#).unwrap();
        assert_eq!(
            extrapolated.zero.ratio_settings(&extrapolated.sweep).zero_field,
            ZeroFieldResistivity::Extrapolated {
                points: DEFAULT_EXTRAPOLATION_POINTS,
                max_field_t: None
            }
        );
        let kohler: KohlerParams = serde_json::from_str("{}").unwrap();
        let (settings, defaults) = (kohler.settings(), KohlerSettings::default());
        assert_eq!(
            (settings.tolerance, settings.grid_points),
            (defaults.tolerance, defaults.grid_points)
        );
        let two_band: TwoBandParams = serde_json::from_str("{}").unwrap();
        let (settings, defaults) = (two_band.settings(), TwoBandSettings::default());
        assert_eq!(settings.kinds, defaults.kinds);
        assert_eq!(
            (settings.random_starts, settings.seed),
            (defaults.random_starts, defaults.seed)
        );
        let symmetrize: SymmetrizeParams = serde_json::from_str("{}").unwrap();
        assert_eq!(symmetrize.misalignment_max_field_t, None);
    }

    // A choice outside an enum is refused naming the choices, even past the host's check.
    #[test]
    fn unknown_choices_are_refused_naming_the_valid_ones() {
        let inputs = sweep();
        let refused = |result: Result<AnalysisOutput, AnalysisError>| match result {
            Err(AnalysisError::InvalidInput(message)) => message,
            other => panic!("refused as invalid input, not {other:?}"),
        };
        let message = refused(run_typed::<RatioAnalysis>(
            r#"{"zero_field": "fitted"}"#,
            &inputs,
            &Host::detached(),
        ));
        assert!(
            message.contains("fitted") && message.contains("extrapolated"),
            "{message}"
        );
        let message = refused(run_typed::<TwoBandAnalysis>(
            r#"{"carriers": ["n", "e"]}"#,
            &inputs,
            &Host::detached(),
        ));
        assert!(
            message.contains("carriers[1]") && message.contains(r#""e""#) && message.contains(r#""p""#),
            "{message}"
        );
        let message = refused(run_typed::<TwoBandAnalysis>(
            r#"{"carriers": ["n"]}"#,
            &inputs,
            &Host::detached(),
        ));
        assert!(
            message.contains("params.carriers must have at least 2 items"),
            "{message}"
        );
        // Given choices reach the physics.
        let output = run_typed::<TwoBandAnalysis>(r#"{"carriers": ["n", "n"]}"#, &inputs, &Host::detached()).unwrap();
        assert_eq!(output.summary["carriers"][0]["carrier_type"], json!("n"));
        assert_eq!(output.summary["carriers"][1]["carrier_type"], json!("n"));
    }
}
