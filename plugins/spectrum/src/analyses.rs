//! Table glue of the spectrum analyses: the `sweep` role into `SweepPoint`s, the
//! parameters into settings, and the results into tables ready to plot and summaries.
//!
//! A sweep at one field sign is accepted when it has rho_xy (the `sweep` role requires it):
//! `mobilis_physics::sweep::symmetrize` uses the branch as measured, and both analyses report
//! `single_field_sign: true` with a warning that the misalignment of the Hall contacts (a
//! part of rho_xx picked up in rho_xy, even in B) could not be removed.
//!
//! The parameters are typed structs ([`MultiCarrierParams`], [`SpectrumParams`]): their JSON
//! Schema is derived from them, their defaults read the settings' `Default`, and every choice
//! is an enum carrying its wire name.

use crate::mobility_spectrum::{
    mobility_spectrum_of_symmetrized, GridRange, RegularizationRule, SpectrumError, SpectrumSettings,
};
use crate::multi_carrier::summary::BudgetParams;
use crate::multi_carrier::{
    fit_sweep_monitored, CarrierSelection, CurvePoint, InformationCriterion, MultiCarrierError, MultiCarrierSettings,
};
use crate::reduction::reduce;
use mobilis_physics::sweep::{symmetrize, SweepPoint, SweepUse};
use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType};
use mobilis_sdk::choices::CarrierChoice;
use mobilis_sdk::figure_spec::FigureSpec;
use mobilis_sdk::sdk::{invalid, Analysis, AnalysisError, AnalysisOutput, Host, Inputs, OutputBuilder};
use mobilis_sdk::sweep_table::{
    repeat_summary, repeat_summary_keys, single_sweep, sweep_role, SweepParams, SweepTable,
};
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use serde_json::{json, Value};

/// The declaration both analyses share: one sweep in, the sweep's identity first among the
/// summary keys, the budget's bookkeeping and the one-sign flag last.
struct SweepDeclaration {
    summary: &'static str,
    description: &'static str,
    outputs: Vec<ColumnSpec>,
    /// The analysis's own summary keys, between the identity and the shared tail.
    summary_keys: Vec<ColumnSpec>,
    figures: Vec<FigureSpec>,
}

impl SweepDeclaration {
    fn declaration(self) -> AnalysisDeclaration {
        use ColumnType::*;
        let mut summary_keys = vec![
            ColumnSpec::new("sample", Str, None, "the sweep's sample"),
            ColumnSpec::new("temperature_K", F64, Some("K"), "the sweep's temperature"),
        ];
        summary_keys.extend(self.summary_keys);
        summary_keys.extend([
            ColumnSpec::new(
                "floored_points",
                I64,
                None,
                "points whose relative uncertainty was raised to relative_uncertainty_floor",
            ),
            ColumnSpec::new(
                "reading_reuse_factor",
                F64,
                None,
                "how often a reading enters the symmetrized points",
            ),
            ColumnSpec::new(
                "calibrations_not_stated",
                Str,
                None,
                "list of the calibrations not stated (their defaults were assumed)",
            ),
            ColumnSpec::new(
                "single_field_sign",
                Bool,
                None,
                "true when the sweep had one field sign: used as measured, the Hall contacts' misalignment not removed",
            ),
        ]);
        summary_keys.extend(repeat_summary_keys());
        AnalysisDeclaration {
            summary: self.summary.into(),
            description: self.description.into(),
            inputs: vec![sweep_role(false)],
            outputs: self.outputs,
            summary_keys,
            figures: self.figures,
            ..Default::default()
        }
    }
}

/// The one sweep of a call, reduced onto a field grid when it is long (the reduction's note
/// joins the grouping's warnings).
fn prepared_sweep(inputs: &Inputs, sweep: &SweepParams) -> Result<(SweepTable, Vec<SweepPoint>), AnalysisError> {
    let mut table = single_sweep(inputs.required("sweep")?, &sweep.grouping())?;
    let points = std::mem::take(&mut table.points);
    let points = reduced_if_long(points, sweep.settings().zero_field_tolerance_t, &mut table.warnings);
    Ok((table, points))
}

/// A long logged sweep reduced onto a field grid (see `crate::reduction`), with a warning
/// that says so; a short sweep as it is.
fn reduced_if_long(
    points: Vec<SweepPoint>,
    zero_field_tolerance_t: f64,
    warnings: &mut Vec<String>,
) -> Vec<SweepPoint> {
    match reduce(&points, zero_field_tolerance_t) {
        Some(reduced) => {
            warnings.push(reduced.note());
            reduced.points
        }
        None => points,
    }
}

/// `spectrum.multi_carrier_fit`.
pub struct MultiCarrierFitAnalysis;

/// Parameters of `spectrum.multi_carrier_fit`.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct MultiCarrierParams {
    #[serde(flatten)]
    sweep: SweepParams,
    /// conducting thickness: also report volume densities
    #[schemars(extend("exclusiveMinimum" = 0))]
    thickness_m: Option<f64>,
    /// the carrier list, e.g. ["n", "n"]; default: chosen automatically by the information criterion
    #[schemars(length(min = 1, max = 6))]
    carriers: Option<Vec<CarrierChoice>>,
    /// automatic selection: the most carriers tried
    #[serde(default = "MultiCarrierParams::max_carriers")]
    #[schemars(range(min = 1, max = 5))]
    max_carriers: usize,
    /// information criterion of the automatic selection
    #[serde(default)]
    criterion: InformationCriterion,
    /// random starts per carrier list, besides those derived from the data
    #[serde(default = "MultiCarrierParams::random_starts")]
    #[schemars(range(min = 0, max = 200))]
    random_starts: usize,
    /// seed of the random starts
    #[serde(default = "MultiCarrierParams::seed")]
    #[schemars(range(min = 0))]
    seed: u64,
    #[serde(flatten)]
    budget: BudgetParams,
}

/// The defaults are those of [`MultiCarrierSettings`], so they are stated once.
impl MultiCarrierParams {
    fn max_carriers() -> usize {
        match CarrierSelection::default() {
            CarrierSelection::Automatic { max_carriers } => max_carriers,
            // The default selection is automatic; a fixed list tries one size.
            CarrierSelection::Kinds(kinds) => kinds.len(),
            CarrierSelection::Guess(carriers) => carriers.len(),
        }
    }

    fn random_starts() -> usize {
        MultiCarrierSettings::default().random_starts
    }

    fn seed() -> u64 {
        MultiCarrierSettings::default().seed
    }

    fn settings(&self) -> MultiCarrierSettings {
        let selection = match &self.carriers {
            Some(list) => CarrierSelection::Kinds(list.iter().map(|&code| code.into()).collect()),
            None => CarrierSelection::Automatic {
                max_carriers: self.max_carriers,
            },
        };
        MultiCarrierSettings {
            selection,
            criterion: self.criterion,
            random_starts: self.random_starts,
            seed: self.seed,
            relative_uncertainty_floor: self.budget.relative_uncertainty_floor,
            calibration: self.budget.calibration(),
            ..MultiCarrierSettings::default()
        }
    }
}

impl Analysis for MultiCarrierFitAnalysis {
    const NAME: &'static str = "spectrum.multi_carrier_fit";
    type Params = MultiCarrierParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        SweepDeclaration {
            summary: "Sheet density and mobility of each carrier from the field dependence of sigma_xx and sigma_xy (discrete multi-carrier fit)",
            description: "Symmetrizes rho_xx and antisymmetrizes rho_xy (interpolating each field branch), converts to the conductivity tensor and fits N Drude carriers jointly to sigma_xx(B) and sigma_xy(B), weighted by the uncertainties, from many starts. Without a carrier list N grows while the information criterion improves, trying every electron/hole split. Warns when carriers cannot be told apart in the field range (mu B_max < 1). A sweep at one field sign is used as measured and flagged single_field_sign.",
            outputs: vec![
                ColumnSpec::new("field_T", F64, Some("T"), "field (symmetrized, |B|)"),
                ColumnSpec::new("sigma_xx_S", F64, Some("S"), "sheet conductivity from the data"),
                ColumnSpec::new("sigma_xy_S", F64, Some("S"), "transverse sheet conductivity from the data"),
                ColumnSpec::new("sigma_xx_fit_S", F64, Some("S"), "the fitted model"),
                ColumnSpec::new("sigma_xy_fit_S", F64, Some("S"), "the fitted model"),
                ColumnSpec::new("rho_xx_ohm_sq", F64, Some("ohm_sq"), "symmetrized data"),
                ColumnSpec::new("rho_xy_ohm", F64, Some("ohm"), "antisymmetrized data"),
                ColumnSpec::new("rho_xx_fit_ohm_sq", F64, Some("ohm_sq"), "the fitted model"),
                ColumnSpec::new("rho_xy_fit_ohm", F64, Some("ohm"), "the fitted model"),
                ColumnSpec::new("residual_xx", F64, None, "whitened residual of sigma_xx"),
                ColumnSpec::new("residual_xy", F64, None, "whitened residual of sigma_xy"),
            ],
            summary_keys: vec![
                ColumnSpec::new("carrier_count", I64, None, "carriers fitted"),
                ColumnSpec::new("criterion", Str, None, "information criterion of the selection"),
                ColumnSpec::new("score", F64, None, "the chosen fit's criterion value"),
                ColumnSpec::new("candidates", Str, None, "list of {carriers, score, chi_square, ...}: every carrier list tried"),
                ColumnSpec::new("chi_square", F64, None, "chi^2 of the fit"),
                ColumnSpec::new("reduced_chi_square", F64, None, "chi^2 / nu against the stated uncertainties; null when the data carry none (the residuals then set the noise scale, and chi-square tests nothing)"),
                ColumnSpec::new("chi_square_p_value", F64, None, "P(chi^2 >= observed) when the uncertainties are stated"),
                ColumnSpec::new("birge_ratio", F64, None, "sqrt(chi^2 / nu) when above 1"),
                ColumnSpec::new("degrees_of_freedom", I64, None, "points minus fitted parameters"),
                ColumnSpec::new("weighted", Bool, None, "the fit used the stated uncertainties"),
                ColumnSpec::new("relative_uncertainty_floor", F64, None, "the floor applied to relative uncertainties"),
                ColumnSpec::new("max_field_T", F64, Some("T"), "the largest |B|"),
                ColumnSpec::new("max_interpolation_correction", F64, None, "largest relative change made by interpolating the field branches"),
                ColumnSpec::new("max_rho_xx_asymmetry", F64, None, "largest removed odd part relative to rho_xx"),
                ColumnSpec::new("max_rho_xy_asymmetry", F64, None, "largest removed even part relative to rho_xy"),
                ColumnSpec::new("carriers", Str, None, "list of {carrier_type, sheet_density_m2, mobility_m2_per_Vs} with _unc"),
            ],
            figures: crate::figures::multi_carrier_fit(),
        }
        .declaration()
    }

    fn run(params: MultiCarrierParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let (table, points) = prepared_sweep(inputs, &params.sweep)?;
        let result =
            fit_sweep_monitored(&points, &params.sweep.settings(), &params.settings(), host).map_err(|error| {
                match error {
                    MultiCarrierError::Cancelled => AnalysisError::Cancelled,
                    MultiCarrierError::NotConverged { .. } => AnalysisError::Numerical(error.to_string()),
                    other => invalid(other.to_string()),
                }
            })?;
        let fit = &result.fit;
        let curve = &fit.curve;
        let column = |value: fn(&CurvePoint) -> f64| -> Vec<f64> { curve.iter().map(value).collect() };
        let carriers: Vec<Value> = fit
            .carriers
            .iter()
            .map(|c| crate::multi_carrier::summary::carrier_summary(c, params.thickness_m))
            .collect();
        let candidates: Vec<Value> = fit
            .candidates
            .iter()
            .map(|c| {
                json!({
                    "carriers": c.kinds.iter().map(|k| k.code()).collect::<Vec<_>>(),
                    "score": c.score,
                    "chi_square": c.chi_square,
                    "failure": c.failure,
                })
            })
            .collect();
        let mut output = OutputBuilder::of::<Self>();
        output
            .f64("field_T", column(|p| p.field_t))
            .f64("sigma_xx_S", column(|p| p.sigma_xx_s))
            .f64("sigma_xy_S", column(|p| p.sigma_xy_s))
            .f64("sigma_xx_fit_S", column(|p| p.sigma_xx_fit_s))
            .f64("sigma_xy_fit_S", column(|p| p.sigma_xy_fit_s))
            .f64("rho_xx_ohm_sq", column(|p| p.rho_xx_ohm_sq))
            .f64("rho_xy_ohm", column(|p| p.rho_xy_ohm))
            .f64("rho_xx_fit_ohm_sq", column(|p| p.rho_xx_fit_ohm_sq))
            .f64("rho_xy_fit_ohm", column(|p| p.rho_xy_fit_ohm))
            .f64("residual_xx", column(|p| p.residual_xx))
            .f64_nullable("residual_xy", curve.iter().map(|p| p.residual_xy).collect())
            .summary_map(table.identity())
            .summary("carrier_count", carriers.len())
            .summary("carriers", carriers)
            .summary("criterion", fit.criterion.name())
            .summary("score", fit.score)
            .summary("chi_square", fit.chi_square)
            .summary("degrees_of_freedom", fit.degrees_of_freedom)
            .summary_map(crate::multi_carrier::summary::fit_summary(fit))
            .summary("weighted", fit.weighted)
            .summary("max_field_T", fit.max_field_t)
            .summary("candidates", candidates)
            .summary("max_rho_xx_asymmetry", result.symmetrized.max_rho_xx_asymmetry)
            .summary("max_rho_xy_asymmetry", result.symmetrized.max_rho_xy_asymmetry)
            .summary("max_interpolation_correction", result.max_interpolation_correction)
            .summary("single_field_sign", result.symmetrized.single_field_sign)
            .summary_map(repeat_summary([&result.symmetrized.repeats]))
            .warnings(table.warnings)
            .warnings(result.symmetrized.warnings(SweepUse::Tensor))
            .warnings(fit.warnings.iter().cloned());
        host.progress(1.0, "done");
        output.finish(curve.len())
    }
}

/// `spectrum.mobility`.
pub struct MobilitySpectrumAnalysis;

/// How the strength of the smoothness penalty is chosen.
// A choice of the parameters' own: `RegularizationRule` carries the fixed strength itself.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Regularization {
    /// the discrepancy principle with uncertainties, the L-curve without
    Auto,
    /// the largest strength whose chi-square is at most the number of data (needs uncertainties)
    Discrepancy,
    /// the corner of the L-curve
    LCurve,
    /// the strength given as regularization_strength
    Fixed,
}

impl Regularization {
    /// The wire name, for messages.
    fn name(self) -> String {
        match serde_json::to_value(self) {
            Ok(Value::String(name)) => name,
            _ => format!("{self:?}"),
        }
    }
}

/// Parameters of `spectrum.mobility`.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct SpectrumParams {
    #[serde(flatten)]
    sweep: SweepParams,
    /// conducting thickness: also report volume densities
    #[schemars(extend("exclusiveMinimum" = 0))]
    thickness_m: Option<f64>,
    /// grid mobilities per carrier sign (logarithmic grid)
    #[serde(default = "SpectrumParams::points_per_sign")]
    #[schemars(range(min = 8, max = 1000))]
    points_per_sign: usize,
    /// lowest grid mobility; default 0.1 / B_max
    #[serde(rename = "mobility_min_m2_per_Vs")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    mobility_min_m2_per_vs: Option<f64>,
    /// highest grid mobility; default 10 / B_min
    #[serde(rename = "mobility_max_m2_per_Vs")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    mobility_max_m2_per_vs: Option<f64>,
    /// how the smoothing strength is chosen: auto (discrepancy principle with uncertainties, L-curve without), or fixed (regularization_strength); not given: auto, or fixed when regularization_strength is given
    // Declared as the plain choice: "not given" is the only way to leave it out (null is
    // not a choice), and it reads as auto unless a strength is given.
    #[serde(default)]
    #[schemars(with = "Regularization", extend("default" = "auto"))]
    regularization: Option<Regularization>,
    /// the dimensionless strength for regularization: fixed
    #[schemars(extend("exclusiveMinimum" = 0))]
    regularization_strength: Option<f64>,
    /// a local maximum is a peak above this fraction of the largest spectrum value
    #[serde(default = "SpectrumParams::peak_threshold")]
    #[schemars(extend("exclusiveMinimum" = 0, "exclusiveMaximum" = 1))]
    peak_threshold: f64,
    /// bootstrap replicas for the peaks' uncertainties (0: none)
    #[serde(default = "SpectrumParams::uncertainty_replicas")]
    #[schemars(range(min = 0, max = 1000))]
    uncertainty_replicas: usize,
    #[serde(flatten)]
    budget: BudgetParams,
}

/// The defaults are those of [`SpectrumSettings`], so they are stated once.
impl SpectrumParams {
    fn points_per_sign() -> usize {
        SpectrumSettings::default().points_per_sign
    }

    fn peak_threshold() -> f64 {
        SpectrumSettings::default().peak_threshold
    }

    fn uncertainty_replicas() -> usize {
        SpectrumSettings::default().uncertainty_replicas
    }

    /// The settings; refuses the pairs of parameters that only go together.
    fn settings(&self) -> Result<SpectrumSettings, AnalysisError> {
        let mobility_range = match (self.mobility_min_m2_per_vs, self.mobility_max_m2_per_vs) {
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
        let rule = match (self.regularization, self.regularization_strength) {
            (None | Some(Regularization::Auto), None) => RegularizationRule::Auto,
            (Some(Regularization::Discrepancy), None) => RegularizationRule::Discrepancy,
            (Some(Regularization::LCurve), None) => RegularizationRule::LCurve,
            (Some(Regularization::Fixed) | None, Some(strength)) => RegularizationRule::Fixed(strength),
            (Some(Regularization::Fixed), None) => {
                return Err(invalid("regularization: fixed needs regularization_strength"))
            }
            (Some(other), Some(_)) => {
                return Err(invalid(format!(
                    "regularization_strength goes with regularization: fixed, not `{}`",
                    other.name()
                )))
            }
        };
        Ok(SpectrumSettings {
            points_per_sign: self.points_per_sign,
            mobility_range,
            rule,
            peak_threshold: self.peak_threshold,
            uncertainty_replicas: self.uncertainty_replicas,
            relative_uncertainty_floor: self.budget.relative_uncertainty_floor,
            calibration: self.budget.calibration(),
        })
    }
}

impl Analysis for MobilitySpectrumAnalysis {
    const NAME: &'static str = "spectrum.mobility";
    type Params = SpectrumParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        SweepDeclaration {
            summary: "Mobility spectrum of electrons and holes: the Beck-Anderson envelope and a regularized non-negative spectrum with its peaks integrated into sheet densities and mobilities",
            description: "On a logarithmic mobility grid for each sign: the Beck-Anderson upper bound (J. Appl. Phys. 62, 541, 1987) and a regularized spectrum by non-negative least squares with a second-difference penalty in ln mu (Provencher's CONTIN approach on the Beck-Anderson kernel), its strength chosen by the discrepancy principle or the L-curve. Reports progress and stops promptly when cancelled (analysis.cancel).",
            outputs: vec![
                ColumnSpec::new("mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "grid mobility magnitude"),
                ColumnSpec::new("electron_envelope_S", F64, Some("S"), "Beck-Anderson bound for electrons"),
                ColumnSpec::new("electron_spectrum_S", F64, Some("S"), "d sigma / d ln mu of electrons"),
                ColumnSpec::new("electron_density_m2", F64, Some("m^-2"), "d n / d ln mu of electrons"),
                ColumnSpec::new("hole_envelope_S", F64, Some("S"), "Beck-Anderson bound for holes"),
                ColumnSpec::new("hole_spectrum_S", F64, Some("S"), "d sigma / d ln mu of holes"),
                ColumnSpec::new("hole_density_m2", F64, Some("m^-2"), "d n / d ln mu of holes"),
            ],
            summary_keys: vec![
                ColumnSpec::new("regularization", Str, None, "how the smoothing strength was chosen"),
                ColumnSpec::new("regularization_strength", F64, None, "the dimensionless smoothing strength used"),
                ColumnSpec::new("chi_square", F64, None, "chi^2 of the regularized spectrum"),
                ColumnSpec::new("data_count", I64, None, "data values fitted"),
                ColumnSpec::new("total_conductance_S", F64, Some("S"), "sigma_xx(0) of the data"),
                ColumnSpec::new("peaks", Str, None, "list of {carrier_type, sheet_density_m2, mobility_m2_per_Vs} with _unc"),
            ],
            figures: crate::figures::mobility(),
        }
        .declaration()
    }

    fn run(params: SpectrumParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let (table, points) = prepared_sweep(inputs, &params.sweep)?;
        let settings = params.settings()?;
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
        let peaks: Vec<Value> = spectrum
            .peaks
            .iter()
            .map(|p| crate::mobility_spectrum::summary::peak_summary(p, params.thickness_m))
            .collect();
        let rows = spectrum.mobility_m2_per_vs.len();
        let mut output = OutputBuilder::of::<Self>();
        output
            .f64("mobility_m2_per_Vs", spectrum.mobility_m2_per_vs.clone())
            .f64("electron_envelope_S", spectrum.electron.envelope_s.clone())
            .f64("electron_spectrum_S", spectrum.electron.spectrum_s.clone())
            .f64("electron_density_m2", spectrum.electron.density_m2.clone())
            .f64("hole_envelope_S", spectrum.hole.envelope_s.clone())
            .f64("hole_spectrum_S", spectrum.hole.spectrum_s.clone())
            .f64("hole_density_m2", spectrum.hole.density_m2.clone())
            .summary_map(table.identity())
            .summary("peaks", peaks)
            .summary("regularization", spectrum.regularization.rule.name())
            .summary("regularization_strength", spectrum.regularization.lambda)
            .summary("chi_square", spectrum.regularization.chi_square)
            .summary("data_count", spectrum.regularization.data_count)
            .summary("total_conductance_S", spectrum.total_conductance_s)
            .summary_map(crate::mobility_spectrum::summary::spectrum_summary(&spectrum))
            .summary("single_field_sign", symmetrized.single_field_sign)
            .summary_map(repeat_summary([&symmetrized.repeats]))
            .warnings(table.warnings)
            .warnings(symmetrized.warnings(SweepUse::Tensor))
            .warnings(spectrum.warnings.iter().cloned());
        output.finish(rows)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_numerics::noise::Rng;
    use mobilis_physics::forward::tensor::{synthetic_sweep, Carrier, SweepImperfections, SweepNoise};
    use mobilis_sdk::sdk::{declaration_of, run_typed};
    use polars::prelude::{Column, DataFrame};

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
                Column::new("field_T".into(), points.iter().map(|p| p.field_t).collect::<Vec<f64>>()),
                Column::new(
                    "rho_xx_ohm_sq".into(),
                    points.iter().map(|p| p.rho_xx_ohm_sq).collect::<Vec<f64>>(),
                ),
                Column::new(
                    "rho_xy_ohm".into(),
                    points.iter().map(|p| p.rho_xy_ohm).collect::<Vec<f64>>(),
                ),
                Column::new("temperature_K".into(), vec![4.2; points.len()]),
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

    /// The derived schema of `A`'s parameter `name`.
    fn property<A: Analysis>(name: &str) -> Value {
        declaration_of::<A>().params["properties"][name].clone()
    }

    // The choices are enums with their wire names, the bounds reach the schema the host
    // validates against, and an unknown choice is refused by deserialization too (a call
    // made without the host's validator) naming the choices.
    #[test]
    fn choices_and_bounds_are_in_the_derived_schemas() {
        let criterion = property::<MultiCarrierFitAnalysis>("criterion");
        let choices: Vec<&Value> = criterion["oneOf"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| &c["const"])
            .collect();
        assert_eq!(choices, [&json!("bic"), &json!("aicc")], "{criterion}");
        assert_eq!(criterion["default"], json!("bic"));
        let carriers = property::<MultiCarrierFitAnalysis>("carriers");
        assert_eq!(
            (carriers["minItems"].clone(), carriers["maxItems"].clone()),
            (json!(1), json!(6)),
            "{carriers}"
        );
        assert_eq!(property::<MultiCarrierFitAnalysis>("max_carriers")["maximum"], json!(5));
        let regularization = property::<MobilitySpectrumAnalysis>("regularization");
        let choices: Vec<&Value> = regularization["oneOf"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| &c["const"])
            .collect();
        assert_eq!(
            choices,
            [
                &json!("auto"),
                &json!("discrepancy"),
                &json!("l_curve"),
                &json!("fixed")
            ],
            "{regularization}"
        );
        assert_eq!(regularization["default"], json!("auto"));
        let required = &declaration_of::<MobilitySpectrumAnalysis>().params["required"];
        assert!(required.is_null() || required == &json!([]), "{required}");
        assert_eq!(
            property::<MobilitySpectrumAnalysis>("points_per_sign")["minimum"],
            json!(8)
        );
        assert_eq!(
            property::<MobilitySpectrumAnalysis>("peak_threshold")["exclusiveMaximum"],
            json!(1)
        );
        for analysis in [
            declaration_of::<MultiCarrierFitAnalysis>(),
            declaration_of::<MobilitySpectrumAnalysis>(),
        ] {
            let floor = &analysis.params["properties"]["relative_uncertainty_floor"];
            assert_eq!(floor["exclusiveMaximum"], json!(0.1), "{floor}");
            assert_eq!(
                analysis.params["properties"]["zero_field_tolerance_T"]["minimum"],
                json!(0)
            );
            assert_eq!(analysis.params["additionalProperties"], json!(false));
        }
        let inputs = table(&[0.0, 1.0, 2.0, 3.0, -1.0, -2.0, -3.0]);
        let error =
            run_typed::<MultiCarrierFitAnalysis>(r#"{"criterion": "aic"}"#, &inputs, &Host::detached()).unwrap_err();
        assert!(error.to_string().contains("aicc"), "{error}");
        let error =
            run_typed::<MultiCarrierFitAnalysis>(r#"{"carriers": ["x"]}"#, &inputs, &Host::detached()).unwrap_err();
        assert!(
            error.to_string().contains(r#"carriers[0] must be one of "n", "p""#),
            "{error}"
        );
        let error =
            run_typed::<MobilitySpectrumAnalysis>(r#"{"regularization": "lcurve"}"#, &inputs, &Host::detached())
                .unwrap_err();
        assert!(error.to_string().contains("l_curve"), "{error}");
    }

    // Omitted parameters give the settings' defaults, which the schema states; the pairs that
    // only go together are still refused by the plugin, naming what to give.
    #[test]
    fn omitted_parameters_are_the_settings_defaults() {
        let fit: MultiCarrierParams = serde_json::from_str("{}").unwrap();
        assert_eq!(fit.settings(), MultiCarrierSettings::default());
        let spectrum: SpectrumParams = serde_json::from_str("{}").unwrap();
        assert_eq!(spectrum.settings().unwrap(), SpectrumSettings::default());
        assert_eq!(
            property::<MobilitySpectrumAnalysis>("uncertainty_replicas")["default"],
            json!(SpectrumSettings::default().uncertainty_replicas)
        );
        assert_eq!(
            property::<MultiCarrierFitAnalysis>("random_starts")["default"],
            json!(12)
        );
        let fixed: SpectrumParams = serde_json::from_str(r#"{"regularization_strength": 0.5}"#).unwrap();
        assert_eq!(fixed.settings().unwrap().rule, RegularizationRule::Fixed(0.5));
        for (params, wanted) in [
            (r#"{"regularization": "fixed"}"#, "needs regularization_strength"),
            (
                r#"{"regularization": "auto", "regularization_strength": 1}"#,
                "not `auto`",
            ),
            (r#"{"mobility_min_m2_per_Vs": 0.01}"#, "give both"),
        ] {
            let params: SpectrumParams = serde_json::from_str(params).unwrap();
            let error = params.settings().unwrap_err().to_string();
            assert!(error.contains(wanted), "{error}");
        }
    }
}
