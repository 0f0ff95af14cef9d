//! `mr.oscillations` and `mr.weak_localization`: the quantum corrections.
//!
//! The `mr.oscillations` table holds the curves, spectra, window amplitudes, Dingle points and
//! line and the fan, told apart by `kind`: `oscillation`, `fft`, `mass`, `mass_fit`, `dingle`,
//! `dingle_fit`, `landau` (the extrema, column `landau_index`: integer at minima of rho_xx,
//! half-integer at maxima) and `landau_fit`. Each of F, n, m*, T_D and tau_q has `_unc`,
//! `_unc_stat`, `_unc_sys`, `_unc_fit` (the fit's own error) and `_unc_analysis_spread` (the
//! spread over backgrounds and windows); the Dingle line reports `dingle_reduced_chi_square`,
//! `dingle_chi_square_p_value` and `dingle_birge_ratio`.

use crate::oscillations::{
    analyze_oscillations, Background, MassMethod, MassRequest, OscillationAnalysis, OscillationError,
    OscillationSettings, OscillationSweep, SweepCurve, SweepSpectrum,
};
use crate::weak_localization::{fit_weak_localization, WeakLocalizationSettings, WeakLocalizationSweep};
use mobilis_numerics::fft::Window;
use mobilis_numerics::fit::FitQuality;
use mobilis_physics::forward::oscillations::thermal_damping_factor;
use mobilis_physics::sweep::{symmetrize, RepeatSummary, SweepUse};
use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType};
use mobilis_sdk::sdk::{invalid, Analysis, AnalysisError, AnalysisOutput, FloatColumn, Host, Inputs, OutputBuilder};
use mobilis_sdk::sweep_table::{
    repeat_summary, single_sweep, sweep_role, sweeps_by_temperature, SweepParams, SweepTable, TemperatureGroupingParams,
};
use polars::prelude::PlSmallStr;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use serde_json::{json, Value};

pub struct OscillationsAnalysis;

/// How the smooth background under the oscillation is removed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum BackgroundChoice {
    /// a least-squares polynomial in B of degree background_degree
    Polynomial,
    /// a local quadratic smoothing in 1/B of half-width background_width_per_T
    Smoothing,
}

/// The window applied before the transform.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum WindowChoice {
    /// 0.5 (1 - cos 2 pi t): the default balance of resolution and leakage
    Hann,
    /// no window: the best resolution, the worst leakage
    Rectangular,
    /// the lowest leakage, the widest lines
    Blackman,
}

impl WindowChoice {
    fn window(self) -> Window {
        match self {
            WindowChoice::Hann => Window::Hann,
            WindowChoice::Rectangular => Window::Rectangular,
            WindowChoice::Blackman => Window::Blackman,
        }
    }

    fn of(window: Window) -> Self {
        match window {
            Window::Hann => WindowChoice::Hann,
            Window::Rectangular => WindowChoice::Rectangular,
            Window::Blackman => WindowChoice::Blackman,
        }
    }
}

/// Where the effective mass comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum MassChoice {
    /// fitted from the temperature dependence when the sweeps span several temperatures,
    /// otherwise none
    Auto,
    /// fitted from the temperature dependence; sweeps at one temperature are refused
    Fit,
    /// given as effective_mass_ratio
    Known,
    /// no mass and no Dingle analysis
    Skip,
}

impl MassChoice {
    fn of(request: MassRequest) -> Self {
        match request {
            MassRequest::Auto => MassChoice::Auto,
            MassRequest::Fit => MassChoice::Fit,
            MassRequest::Known { .. } => MassChoice::Known,
            MassRequest::Skip => MassChoice::Skip,
        }
    }
}

/// Parameters of `mr.oscillations`. Those without a default value are optional because "not
/// given" means something of its own, stated on each (a window chosen from the data, an
/// assumed calibration listed in `calibrations_not_stated`); the defaults are the analysis'
/// own.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct OscillationParams {
    #[serde(flatten)]
    sweep: SweepParams,
    /// lower end of the field window, T; default the larger of the lowest positive field
    /// and B_max / 10
    #[serde(rename = "field_min_T", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    field_min_t: Option<f64>,
    /// upper end of the field window, T; default the largest field
    #[serde(rename = "field_max_T", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    field_max_t: Option<f64>,
    /// how the smooth background is removed: a polynomial in B, or a smoothing in 1/B
    #[serde(default = "OscillationParams::background")]
    background: BackgroundChoice,
    /// degree of the polynomial background (background: polynomial only)
    #[serde(default)]
    #[schemars(range(max = 12), extend("default" = OscillationParams::background_degree()))]
    background_degree: Option<usize>,
    /// smoothing half-width in 1/B, several periods 1/F (background: smoothing only, which
    /// needs it)
    #[serde(rename = "background_width_per_T", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    background_width_per_t: Option<f64>,
    /// FFT window
    #[serde(default = "OscillationParams::window")]
    window: WindowChoice,
    /// FFT zero-padding factor
    #[serde(default = "OscillationParams::zero_padding")]
    #[schemars(range(min = 1, max = 64))]
    zero_padding: usize,
    /// dominant frequencies to report
    #[serde(default = "OscillationParams::frequencies")]
    #[schemars(range(min = 1, max = 10))]
    frequencies: usize,
    /// g_s of n = g_s e F / h
    #[serde(default = "OscillationParams::spin_degeneracy")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    spin_degeneracy: f64,
    /// effective mass: fitted from the temperature dependence (auto: when several
    /// temperatures), given (known, with effective_mass_ratio), or skipped; not given with
    /// effective_mass_ratio it is known, else auto
    #[serde(default)]
    #[schemars(extend("default" = OscillationParams::mass()))]
    mass: Option<MassChoice>,
    /// m*/m0 for mass: known (the Dingle analysis needs a mass)
    #[serde(default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    effective_mass_ratio: Option<f64>,
    /// fit the damped waveform across temperatures, or fit the Lifshitz-Kosevich damping in
    /// narrow 1/B windows each with its own field; both avoid the bias of one wide FFT window
    #[serde(default = "OscillationParams::mass_method")]
    mass_method: MassMethod,
    /// Dingle temperature and quantum lifetime from the amplitude's field dependence
    #[serde(default = "OscillationParams::dingle")]
    dingle: bool,
    /// Landau-level fan of the extrema for the phase
    #[serde(default = "OscillationParams::landau_fan")]
    landau_fan: bool,
    /// repeat the analysis with higher background degrees (or other smoothing widths) and a
    /// shorter field window, and add the spread of F, m* and T_D beyond their noise to the
    /// statistical uncertainty
    #[serde(default = "OscillationParams::model_spread")]
    model_spread: bool,
    /// relative standard uncertainty of the magnet's field calibration (Type B); scales F, n
    /// and m*. Not given: 0.005 is assumed and listed in calibrations_not_stated
    #[serde(default)]
    #[schemars(range(min = 0, max = 0.5))]
    field_calibration_rel: Option<f64>,
    /// standard uncertainty of the thermometer, common to every sweep (Type B), K; moves m*
    /// and T_D. Not given: 0.02 K is assumed and listed in calibrations_not_stated
    #[serde(rename = "temperature_accuracy_K", default)]
    #[schemars(range(min = 0))]
    temperature_accuracy_k: Option<f64>,
    /// standard uncertainty of each sweep's own temperature (stage drift, setpoint scatter),
    /// independent from sweep to sweep, K; moves m* and T_D in the statistical part. Not
    /// included when not given
    #[serde(rename = "temperature_stability_K", default)]
    #[schemars(range(min = 0))]
    temperature_stability_k: Option<f64>,
}

/// The defaults are those of the analysis' settings, so they are stated once.
impl OscillationParams {
    fn background() -> BackgroundChoice {
        match Background::default() {
            Background::Polynomial { .. } => BackgroundChoice::Polynomial,
            Background::Smoothing { .. } => BackgroundChoice::Smoothing,
        }
    }
    /// The degree of the default background, or a cubic should the default ever be a
    /// smoothing (three terms beyond the constant follow a smooth background; step 3 of the
    /// analysis' documentation).
    fn background_degree() -> usize {
        match Background::default() {
            Background::Polynomial { degree } => degree,
            Background::Smoothing { .. } => 3,
        }
    }
    fn window() -> WindowChoice {
        WindowChoice::of(OscillationSettings::default().window)
    }
    fn zero_padding() -> usize {
        OscillationSettings::default().zero_padding
    }
    fn frequencies() -> usize {
        OscillationSettings::default().frequencies
    }
    fn spin_degeneracy() -> f64 {
        OscillationSettings::default().spin_degeneracy
    }
    fn mass() -> MassChoice {
        MassChoice::of(OscillationSettings::default().mass)
    }
    fn mass_method() -> MassMethod {
        OscillationSettings::default().mass_method
    }
    fn dingle() -> bool {
        OscillationSettings::default().dingle
    }
    fn landau_fan() -> bool {
        OscillationSettings::default().landau_fan
    }
    fn model_spread() -> bool {
        OscillationSettings::default().model_spread
    }
}

impl OscillationParams {
    /// The settings of these parameters; refuses the combinations the schema cannot: a
    /// background's parameter given with the other background, a mass without its ratio or
    /// a ratio with another mass.
    fn settings(&self) -> Result<OscillationSettings, AnalysisError> {
        let background = match (self.background, self.background_degree, self.background_width_per_t) {
            (BackgroundChoice::Polynomial, degree, None) => Background::Polynomial {
                degree: degree.unwrap_or_else(OscillationParams::background_degree),
            },
            (BackgroundChoice::Smoothing, None, Some(width)) => Background::Smoothing { width_inverse_t: width },
            (BackgroundChoice::Smoothing, None, None) => {
                return Err(invalid(
                    "background: smoothing needs background_width_per_T (several periods 1/F)",
                ))
            }
            _ => return Err(invalid(
                "background_degree goes with background: polynomial, background_width_per_T with background: smoothing",
            )),
        };
        let mass = match (self.mass, self.effective_mass_ratio) {
            (None, None) => OscillationSettings::default().mass,
            (Some(MassChoice::Auto), None) => MassRequest::Auto,
            (Some(MassChoice::Fit), None) => MassRequest::Fit,
            (Some(MassChoice::Skip), None) => MassRequest::Skip,
            (None | Some(MassChoice::Known), Some(ratio)) => MassRequest::Known {
                effective_mass_ratio: ratio,
            },
            (Some(MassChoice::Known), None) => return Err(invalid("mass: known needs effective_mass_ratio")),
            (Some(other), Some(_)) => {
                let name = serde_json::to_value(other).unwrap_or(Value::Null);
                let name = name.as_str().unwrap_or_default();
                return Err(invalid(format!(
                    "mass `{name}` with effective_mass_ratio: give mass: known, or leave effective_mass_ratio out"
                )));
            }
        };
        Ok(OscillationSettings {
            field_min_t: self.field_min_t,
            field_max_t: self.field_max_t,
            background,
            window: self.window.window(),
            zero_padding: self.zero_padding,
            frequencies: self.frequencies,
            spin_degeneracy: self.spin_degeneracy,
            mass,
            mass_method: self.mass_method,
            dingle: self.dingle,
            landau_fan: self.landau_fan,
            model_spread: self.model_spread,
            field_calibration_rel: self.field_calibration_rel,
            temperature_accuracy_k: self.temperature_accuracy_k,
            temperature_stability_k: self.temperature_stability_k,
            ..OscillationSettings::default()
        })
    }
}

impl Analysis for OscillationsAnalysis {
    const NAME: &'static str = "mr.oscillations";
    type Params = OscillationParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Shubnikov-de Haas analysis: frequencies and 2D densities, the effective mass from the thermal damping, the Dingle temperature and quantum lifetime".into(),
            description: "Each temperature's sweep is symmetrized; the background is removed (polynomial in B or smoothing), the oscillation resampled on a uniform 1/B grid and transformed (windowed, zero-padded FFT). n = g_s e F / h (Onsager). The mass comes from the Lifshitz-Kosevich factor X / sinh X, X = 2 pi^2 k_B T m* / (hbar e B), fitted where each amplitude has its own effective field, never from one wide-window FFT amplitude (which mixes very different damping); the Dingle temperature from ln(A sinh X / X) against 1/B, tau_q = hbar / (2 pi k_B T_D). Each result's _unc is the total standard uncertainty: _unc_stat (the fit's scatter-scaled error and the spread over higher background degrees and a shorter window) and _unc_sys (the stated field_calibration_rel and temperature_accuracy_K) in quadrature.".into(),
            inputs: vec![sweep_role(true)],
            outputs: vec![
                ColumnSpec::new("kind", Str, None, "oscillation (the curve), fft (the spectrum), mass (window amplitudes), mass_fit (each window's Lifshitz-Kosevich fit A_0 R_T on a temperature grid), dingle (Dingle plot windows), dingle_fit (the fitted Dingle line at the first and last window), landau (extrema of the Landau fan, with landau_fan) or landau_fit (the fan's fitted line at 1/B = 0 and at the last extremum)"),
                ColumnSpec::new("temperature_K", F64, Some("K"), "temperature of the sweep"),
                ColumnSpec::new("field_T", F64, Some("T"), "field (oscillation rows) or effective field (mass and mass_fit rows)"),
                ColumnSpec::new("inverse_field_per_T", F64, None, "1/B, 1/T (oscillation, dingle, dingle_fit, landau and landau_fit rows)"),
                ColumnSpec::new("frequency_T", F64, Some("T"), "frequency (fft rows)"),
                ColumnSpec::new("rho_xx_ohm_sq", F64, Some("ohm_sq"), "symmetrized rho_xx (oscillation rows)"),
                ColumnSpec::new("background_ohm_sq", F64, Some("ohm_sq"), "removed background (oscillation rows)"),
                ColumnSpec::new("value_ohm_sq", F64, Some("ohm_sq"), "the oscillation (oscillation rows), amplitude (fft, mass and dingle rows) or fitted amplitude (mass_fit rows)"),
                ColumnSpec::new("value_ohm_sq_unc", F64, Some("ohm_sq"), "amplitude uncertainty (mass and dingle rows)"),
                ColumnSpec::new("dingle_ordinate", F64, None, "ln(A sinh X / X), A in ohm per square (dingle rows; the fitted line on dingle_fit rows)"),
                ColumnSpec::new("landau_index", F64, None, "Landau level index: integer at minima of rho_xx, half-integer at maxima (landau rows); F_fan / B + beta on landau_fit rows"),
            ],
            summary_keys: super::classical::with_repeat_keys(vec![
                ColumnSpec::new("lines", ColumnType::Str, None, "list of {frequency_T, sheet_density_m2, ...} with _unc: one entry per frequency found"),
                ColumnSpec::new("sample", ColumnType::Str, None, "the series' sample"),
                ColumnSpec::new("temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures of the series"),
                ColumnSpec::new("single_field_sign_temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures measured at one field sign"),
                ColumnSpec::new("field_window_T", ColumnType::F64, Some("T"), "[lowest, highest] field analysed"),
                ColumnSpec::new("resolution_T", ColumnType::F64, Some("T"), "frequency resolution of the transform"),
                ColumnSpec::new("mass_method", ColumnType::Str, None, "how the effective mass was obtained"),
                ColumnSpec::new("dingle_reduced_chi_square", ColumnType::F64, None, "chi^2 / nu of the Dingle fit"),
                ColumnSpec::new("dingle_chi_square_p_value", ColumnType::F64, None, "P(chi^2 >= observed) of the Dingle fit"),
                ColumnSpec::new("dingle_birge_ratio", ColumnType::F64, None, "sqrt(chi^2 / nu) of the Dingle fit when above 1"),
                ColumnSpec::new("landau_fan_intercept", ColumnType::F64, None, "intercept of the Landau fan, with _unc"),
                ColumnSpec::new("landau_fan_phase_rad", ColumnType::F64, Some("rad"), "Berry-phase offset of the Landau fan"),
                ColumnSpec::new("waveform_residual_rms_ohm_sq", ColumnType::F64, Some("ohm_sq"), "rms residual of the waveform fit"),
                ColumnSpec::new("frequency_T", F64, Some("T"), "the dominant frequency, with _unc"),
                ColumnSpec::new("sheet_density_m2", F64, Some("m^-2"), "g_s e F / h, with _unc"),
                ColumnSpec::new("effective_mass_ratio", F64, None, "m*/m0, with _unc"),
                ColumnSpec::new("dingle_temperature_K", F64, Some("K"), "with _unc"),
                ColumnSpec::new("quantum_lifetime_s", F64, Some("s"), "hbar / (2 pi k_B T_D), with _unc"),
                super::classical::single_field_sign_key(),
                ColumnSpec::new("calibrations_not_stated", Str, None, "the calibration parameters not stated, whose common-practice values were assumed in the _unc_sys parts (JSON list)"),
                ColumnSpec::new("uncertainty_checks", Str, None, "the repeated analyses whose spread is in the _unc_stat parts (JSON list)"),
            ]),
            figures: crate::figures::oscillations(),
            ..Default::default()
        }
    }

    fn run(params: OscillationParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let tables = sweeps_by_temperature(inputs.required("sweep")?, &params.sweep.grouping())?;
        let symmetrized = symmetrized_sweeps(&params, &tables)?;
        host.progress(0.2, "transforming");
        host.check_cancelled()?;
        let analysis = analyze_oscillations(&symmetrized.sweeps, &params.settings()?).map_err(|error| match error {
            OscillationError::Fit { .. } => AnalysisError::Numerical(error.to_string()),
            other => invalid(other.to_string()),
        })?;
        let mut out = OutputBuilder::of::<Self>();
        let height = oscillation_table(&mut out, &analysis);
        fill_oscillation_summary(&mut out, &analysis, &tables, &symmetrized.sweeps);
        out.summary_map(repeat_summary(&symmetrized.repeats));
        super::classical::series_field_signs(&mut out, &symmetrized.single_sign_temperatures, symmetrized.warnings);
        out.warnings(analysis.warnings.iter().cloned());
        host.progress(1.0, "done");
        out.finish(height)
    }
}

/// The sweeps symmetrized in field, their positive-field halves ready for the analysis,
/// with the sweeps' warnings and the temperatures measured on one field sign only.
struct SymmetrizedSweeps {
    sweeps: Vec<OscillationSweep>,
    warnings: Vec<String>,
    single_sign_temperatures: Vec<f64>,
    /// Each sweep's merged repeated readings.
    repeats: Vec<RepeatSummary>,
}

/// Each sweep symmetrized (rho_xx even in B) and cut to B > 0.
fn symmetrized_sweeps(params: &OscillationParams, tables: &[SweepTable]) -> Result<SymmetrizedSweeps, AnalysisError> {
    let symmetrize_settings = params.sweep.settings();
    let mut sweeps = Vec::with_capacity(tables.len());
    let mut sweep_warnings: Vec<String> = Vec::new();
    let mut single_sign_temperatures: Vec<f64> = Vec::new();
    let mut repeats = Vec::with_capacity(tables.len());
    // The sweeps are symmetrized independently, in parallel; their results are then taken
    // in table order, so the first refusal is the one a serial loop would give.
    let outcomes: Vec<Result<(f64, _), AnalysisError>> = {
        use rayon::prelude::*;
        tables
            .par_iter()
            .map(|table| {
                let temperature_k = table
                    .temperature_k
                    .ok_or_else(|| invalid("mr.oscillations needs temperature_K for every sweep"))?;
                let symmetrized = symmetrize(&table.points, &symmetrize_settings).map_err(|e| {
                    invalid(format!(
                        "sweep at {} K: {e}",
                        mobilis_physics::units::format_number(temperature_k)
                    ))
                })?;
                Ok((temperature_k, symmetrized))
            })
            .collect()
    };
    for (table, outcome) in tables.iter().zip(outcomes) {
        let (temperature_k, symmetrized) = outcome?;
        if symmetrized.single_field_sign {
            single_sign_temperatures.push(temperature_k);
        }
        sweep_warnings.extend(table.warnings.iter().cloned());
        sweep_warnings.extend(
            symmetrized
                .warnings(SweepUse::EvenRhoXx)
                .into_iter()
                .filter(|w| !w.starts_with("single_field_sign"))
                .map(|w| {
                    format!(
                        "sweep at {} K: {w}",
                        mobilis_physics::units::format_number(temperature_k)
                    )
                }),
        );
        repeats.push(symmetrized.repeats.clone());
        let (field_t, rho_xx_ohm_sq) = symmetrized
            .points
            .iter()
            .filter(|p| p.field_t > 0.0)
            .map(|p| (p.field_t, p.rho_xx_ohm_sq))
            .unzip();
        sweeps.push(OscillationSweep {
            temperature_k,
            field_t,
            rho_xx_ohm_sq,
        });
    }
    Ok(SymmetrizedSweeps {
        sweeps,
        repeats,
        warnings: sweep_warnings,
        single_sign_temperatures,
    })
}

/// The rows of the long table, a `kind` per plot, in the eight shared value columns
/// (temperature, field, 1/B, frequency, rho_xx, background, value, its uncertainty). The
/// table has a row per point of every sweep and per bin of every spectrum (about 200,000
/// for six sweeps of 4,000 points), so the columns are reserved for those rows at once and
/// kept as values and flags ([`FloatColumn`]), not as growing vectors of options; the kinds
/// come in long runs and are kept as runs.
struct PlotRows {
    /// Each run of rows of one kind: the kind and its number of rows.
    kind: Vec<(&'static str, usize)>,
    rows: usize,
    cells: [FloatColumn; 8],
}

impl PlotRows {
    /// Empty columns with room for `rows` rows.
    fn with_capacity(rows: usize) -> Self {
        PlotRows {
            kind: Vec::new(),
            rows: 0,
            cells: std::array::from_fn(|_| FloatColumn::with_capacity(rows)),
        }
    }

    /// `rows` more rows of kind `k`, extending the last run when it is of that kind.
    fn push_kind(&mut self, k: &'static str, rows: usize) {
        match self.kind.last_mut() {
            Some((last, count)) if *last == k => *count += rows,
            _ => self.kind.push((k, rows)),
        }
        self.rows += rows;
    }

    fn push(&mut self, k: &'static str, values: [Option<f64>; 8]) {
        self.push_kind(k, 1);
        for (cell, value) in self.cells.iter_mut().zip(values) {
            cell.push(value);
        }
    }
}

/// A row of the Dingle plot or the Landau fan: its kind, its shared cells, and its
/// `dingle_ordinate` and `landau_index`.
type LineRow = (&'static str, [Option<f64>; 8], Option<f64>, Option<f64>);

/// One long table, a `kind` per plot; returns its height.
fn oscillation_table(out: &mut OutputBuilder, analysis: &OscillationAnalysis) -> usize {
    // The sweeps' points and the spectra's bins; the few rows of the other plots grow the
    // columns once at most.
    let long_rows = analysis.curves.iter().map(|curve| curve.field_t.len()).sum::<usize>()
        + analysis
            .spectra
            .iter()
            .map(|spectrum| spectrum.frequencies_t.len())
            .sum::<usize>();
    let mut rows = PlotRows::with_capacity(long_rows);
    push_sweep_rows(&mut rows, analysis);
    push_mass_rows(&mut rows, analysis);
    // The Dingle plot and the Landau fan come last: their rows alone carry dingle_ordinate
    // and landau_index. Each has its fitted line as two rows, so that a figure draws the
    // line the analysis fitted rather than one of its own.
    let tail = line_rows(analysis);
    let height = rows.rows + tail.len();
    let mut ordinate = FloatColumn::with_capacity(height);
    let mut landau_index = FloatColumn::with_capacity(height);
    ordinate.push_nulls(rows.rows);
    landau_index.push_nulls(rows.rows);
    for (k, values, dingle_ordinate, index) in tail {
        rows.push(k, values);
        ordinate.push(dingle_ordinate);
        landau_index.push(index);
    }
    let PlotRows { kind, cells, .. } = rows;
    let [t, b, inv, f, rho, bg, value, unc] = cells;
    let kind = mobilis_sdk::sdk::text_runs_column(
        PlSmallStr::from_static("kind"),
        kind.iter().map(|&(k, rows)| (Some(k), rows)),
    );
    out.column(kind)
        .f64_column("temperature_K", t)
        .f64_column("field_T", b)
        .f64_column("inverse_field_per_T", inv)
        .f64_column("frequency_T", f)
        .f64_column("rho_xx_ohm_sq", rho)
        .f64_column("background_ohm_sq", bg)
        .f64_column("value_ohm_sq", value)
        .f64_column("value_ohm_sq_unc", unc)
        .f64_column("dingle_ordinate", ordinate)
        .f64_column("landau_index", landau_index);
    height
}

/// What a shared column holds on a stretch of rows (one sweep's points or one spectrum's bins).
enum Stretch<'a> {
    Constant(f64),
    Values(&'a [f64]),
    Nulls,
}

/// The oscillation of every sweep and the spectra: a stretch of rows per sweep, written
/// column by column (a copy of each of the sweep's vectors, a run of one value or of nulls).
/// The columns are independent, so they are written in parallel: most of the table's time is
/// the first touch of its fresh pages, a page fault and a cleared page each.
fn push_sweep_rows(rows: &mut PlotRows, analysis: &OscillationAnalysis) {
    use rayon::prelude::*;
    for curve in &analysis.curves {
        rows.push_kind("oscillation", curve.field_t.len());
    }
    for spectrum in &analysis.spectra {
        rows.push_kind("fft", spectrum.frequencies_t.len());
    }
    type OfCurve = for<'a> fn(&'a SweepCurve) -> Stretch<'a>;
    type OfSpectrum = for<'a> fn(&'a SweepSpectrum) -> Stretch<'a>;
    // Per column of `PlotRows::cells`: what an oscillation row and an fft row hold.
    let sources: [(OfCurve, OfSpectrum); 8] = [
        (
            |c| Stretch::Constant(c.temperature_k),
            |s| Stretch::Constant(s.temperature_k),
        ),
        (|c| Stretch::Values(&c.field_t), |_| Stretch::Nulls),
        (|c| Stretch::Values(&c.inverse_field_per_t), |_| Stretch::Nulls),
        (|_| Stretch::Nulls, |s| Stretch::Values(&s.frequencies_t)),
        (|c| Stretch::Values(&c.rho_xx_ohm_sq), |_| Stretch::Nulls),
        (|c| Stretch::Values(&c.background_ohm_sq), |_| Stretch::Nulls),
        (
            |c| Stretch::Values(&c.oscillation_ohm_sq),
            |s| Stretch::Values(&s.amplitudes_ohm_sq),
        ),
        (|_| Stretch::Nulls, |_| Stretch::Nulls),
    ];
    let extend = |cell: &mut FloatColumn, stretch: Stretch<'_>, count: usize| match stretch {
        Stretch::Constant(value) => cell.extend_repeated(Some(value), count),
        Stretch::Values(values) => cell.extend_values(values),
        Stretch::Nulls => cell.push_nulls(count),
    };
    rows.cells
        .par_iter_mut()
        .zip(sources)
        .for_each(|(cell, (of_curve, of_spectrum))| {
            for curve in &analysis.curves {
                extend(cell, of_curve(curve), curve.field_t.len());
            }
            for spectrum in &analysis.spectra {
                extend(cell, of_spectrum(spectrum), spectrum.frequencies_t.len());
            }
        });
}

/// The amplitudes of each narrow window against temperature, with the fitted curve.
fn push_mass_rows(rows: &mut PlotRows, analysis: &OscillationAnalysis) {
    let mut push = |k: &'static str, values: [Option<f64>; 8]| rows.push(k, values);
    if let Some(windows) = &analysis.narrow_windows {
        for window in &windows.windows {
            for a in &window.amplitudes {
                push(
                    "mass",
                    [
                        Some(a.temperature_k),
                        Some(window.effective_field_t),
                        None,
                        None,
                        None,
                        None,
                        Some(a.amplitude_ohm_sq),
                        Some(a.amplitude_unc_ohm_sq),
                    ],
                );
            }
            // The fitted curve itself, so that a mass plot draws the fit and not a line
            // joining the few measured temperatures.
            if let Some(fit) = &window.fit {
                let temperatures: Vec<f64> = window.amplitudes.iter().map(|a| a.temperature_k).collect();
                for temperature_k in mass_fit_temperatures(&temperatures) {
                    let damping =
                        thermal_damping_factor(temperature_k, fit.effective_mass_ratio, window.effective_field_t);
                    push(
                        "mass_fit",
                        [
                            Some(temperature_k),
                            Some(window.effective_field_t),
                            None,
                            None,
                            None,
                            None,
                            Some(fit.prefactor_ohm_sq * damping),
                            None,
                        ],
                    );
                }
            }
        }
    }
}

/// The Dingle plot's and the Landau fan's points and fitted lines.
fn line_rows(analysis: &OscillationAnalysis) -> Vec<LineRow> {
    let mut tail: Vec<LineRow> = Vec::new();
    let at = |temperature_k: f64, inverse_field: f64, value: Option<f64>, unc: Option<f64>| {
        [
            Some(temperature_k),
            None,
            Some(inverse_field),
            None,
            None,
            None,
            value,
            unc,
        ]
    };
    if let Some(dingle) = &analysis.dingle {
        for point in &dingle.points {
            tail.push((
                "dingle",
                at(
                    dingle.temperature_k,
                    point.inverse_field_per_t,
                    Some(point.amplitude_ohm_sq),
                    Some(point.amplitude_unc_ohm_sq),
                ),
                Some(point.ordinate),
                None,
            ));
        }
        // ln(A sinh X / X) = intercept + slope / B across the windows.
        let (first, last) = span(dingle.points.iter().map(|p| p.inverse_field_per_t));
        for x in [first, last] {
            tail.push((
                "dingle_fit",
                at(dingle.temperature_k, x, None, None),
                Some(dingle.intercept + dingle.slope_t * x),
                None,
            ));
        }
    }
    if let Some(fan) = &analysis.landau_fan {
        for point in &fan.points {
            tail.push((
                "landau",
                at(fan.temperature_k, point.inverse_field_per_t, None, None),
                None,
                Some(point.index),
            ));
        }
        // index = F_fan / B + beta, from 1/B = 0 (where the intercept beta is read) to the
        // last extremum.
        let (_, last) = span(fan.points.iter().map(|p| p.inverse_field_per_t));
        for x in [0.0, last] {
            tail.push((
                "landau_fit",
                at(fan.temperature_k, x, None, None),
                None,
                Some(fan.frequency_t * x + fan.intercept),
            ));
        }
    }
    tail
}

/// The summary: the strongest line's numbers with their budgets, the quality of the
/// Dingle and waveform fits, the lines and the fan.
fn fill_oscillation_summary(
    out: &mut OutputBuilder,
    analysis: &OscillationAnalysis,
    tables: &[SweepTable],
    sweeps: &[OscillationSweep],
) {
    let summary_values = analysis.summary();
    if let Some(sample) = &tables[0].sample {
        out.summary("sample", sample);
    }
    out.summary(
        "temperatures_K",
        sweeps.iter().map(|s| s.temperature_k).collect::<Vec<_>>(),
    );
    out.summary("frequency_T", summary_values.frequency_t);
    out.summary("frequency_T_unc", summary_values.frequency_unc_t);
    out.summary("sheet_density_m2", summary_values.sheet_density_m2);
    out.summary("sheet_density_m2_unc", summary_values.sheet_density_unc_m2);
    out.summary("effective_mass_ratio", summary_values.effective_mass_ratio);
    out.summary("effective_mass_ratio_unc", summary_values.effective_mass_ratio_unc);
    out.summary("mass_method", summary_values.mass_method);
    out.summary("dingle_temperature_K", summary_values.dingle_temperature_k);
    out.summary("dingle_temperature_K_unc", summary_values.dingle_temperature_unc_k);
    // The budget: _unc the total, _unc_stat (the fit's scatter-scaled error and the spread
    // over backgrounds and windows), _unc_sys (the stated calibrations), and the parts of
    // the statistical one.
    for (key, budget) in [
        ("frequency_T", summary_values.frequency_budget),
        ("sheet_density_m2", summary_values.sheet_density_budget),
        ("effective_mass_ratio", summary_values.effective_mass_budget),
        ("dingle_temperature_K", summary_values.dingle_temperature_budget),
    ] {
        if let Some(budget) = budget {
            out.summary(&format!("{key}_unc_stat"), budget.statistical);
            out.summary(&format!("{key}_unc_sys"), budget.systematic);
            out.summary(&format!("{key}_unc_fit"), budget.fit);
            out.summary(&format!("{key}_unc_analysis_spread"), budget.analysis_spread);
        }
    }
    out.summary("calibrations_not_stated", &analysis.budget.calibrations_not_stated);
    out.summary("uncertainty_checks", &analysis.budget.variants);
    if let Some(plot) = &analysis.dingle {
        // The Dingle line is weighted by its windows' amplitude errors; its slope's error
        // was scaled by the Birge ratio when chi^2 / nu > 1.
        let nu = plot.points.len().saturating_sub(2);
        let quality = FitQuality::assess(plot.reduced_chi_square * nu as f64, nu);
        out.summary("dingle_reduced_chi_square", finite_or_null(quality.reduced_chi_square));
        out.summary("dingle_chi_square_p_value", finite_or_null(quality.p_value));
        out.summary("dingle_birge_ratio", quality.birge_ratio);
    }
    if let Some(fit) = &analysis.waveform {
        // The waveform fit weights every point alike and scales its errors by the
        // residual scatter: its reduced chi-square is that scatter's variance.
        out.summary("waveform_residual_rms_ohm_sq", fit.reduced_chi_square.max(0.0).sqrt());
    }
    out.summary("quantum_lifetime_s", summary_values.quantum_lifetime_s);
    out.summary("quantum_lifetime_s_unc", summary_values.quantum_lifetime_unc_s);
    out.summary("field_window_T", [analysis.field_window_t.0, analysis.field_window_t.1]);
    out.summary("resolution_T", analysis.resolution_t);
    out.summary("lines", Value::Array(
            analysis
                .lines
                .iter()
                .map(|l| {
                    json!({"frequency_T": l.frequency_t, "frequency_T_unc": l.frequency_unc_t, "amplitude_ohm_sq": l.amplitude_ohm_sq,
                           "sheet_density_m2": l.sheet_density_m2, "sheet_density_m2_unc": l.sheet_density_unc_m2,
                           "periods_in_window": l.periods_in_window, "harmonic_of": l.harmonic_of.map(|(line, order)| json!([line, order]))})
                })
                .collect(),
        ),
    );
    if let Some(fan) = &analysis.landau_fan {
        out.summary("landau_fan_intercept", fan.intercept);
        out.summary("landau_fan_intercept_unc", fan.intercept_unc);
        out.summary("landau_fan_phase_rad", fan.phase_rad);
    }
}

/// The smallest and largest of some values (both NaN without any).
fn span(values: impl Iterator<Item = f64>) -> (f64, f64) {
    values.fold((f64::NAN, f64::NAN), |(lo, hi), v| (lo.min(v), hi.max(v)))
}

/// A number for the summary, or null when it is not finite (no degrees of freedom).
fn finite_or_null(value: f64) -> Option<f64> {
    value.is_finite().then_some(value)
}

/// Points of each window's fitted Lifshitz-Kosevich curve.
const MASS_FIT_POINTS: usize = 48;

/// The temperatures of a window's fitted curve: from half the coldest to 1.1 times the
/// hottest measured temperature, where the fit is backed by data; empty without a spread.
fn mass_fit_temperatures(measured_k: &[f64]) -> Vec<f64> {
    let low = measured_k.iter().copied().fold(f64::INFINITY, f64::min);
    let high = measured_k.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if !(low.is_finite() && high.is_finite() && high > low && low > 0.0) {
        return Vec::new();
    }
    let (start, end) = (0.5 * low, 1.1 * high);
    (0..MASS_FIT_POINTS)
        .map(|k| start + (end - start) * k as f64 / (MASS_FIT_POINTS - 1) as f64)
        .collect()
}

pub struct WeakLocalizationAnalysis;

/// Parameters of `mr.weak_localization`: the sweep's temperature grouping and the fit's
/// settings. The sweep is fitted as measured, sigma(0) its own zero-field average, so the
/// symmetrization parameters of the other sweep analyses do not apply.
#[derive(Debug, Deserialize, JsonSchema)]
pub struct WeakLocalizationParams {
    /// fit up to this field, T; not given: the whole sweep
    #[serde(rename = "max_field_T", default)]
    #[schemars(extend("exclusiveMinimum" = 0))]
    max_field_t: Option<f64>,
    /// |B| at or below this gives sigma(0), T
    #[serde(
        rename = "zero_field_tolerance_T",
        default = "WeakLocalizationParams::zero_field_tolerance"
    )]
    #[schemars(range(min = 0))]
    zero_field_tolerance_t: f64,
    /// also fit a classical -c B^2 term
    #[serde(default = "WeakLocalizationParams::classical_term")]
    classical_term: bool,
    /// fit an offset of sigma(0) instead of trusting the zero-field average (which already
    /// holds part of the cusp when B_phi is small)
    #[serde(default = "fit_offset_default")]
    fit_offset: bool,
    #[serde(flatten)]
    temperatures: TemperatureGroupingParams,
}

/// The defaults are those of the fit's settings, so they are stated once.
impl WeakLocalizationParams {
    fn zero_field_tolerance() -> f64 {
        WeakLocalizationSettings::default().zero_field_tolerance_t
    }
    fn classical_term() -> bool {
        WeakLocalizationSettings::default().classical_term
    }

    fn settings(&self) -> WeakLocalizationSettings {
        WeakLocalizationSettings {
            max_field_t: self.max_field_t,
            zero_field_tolerance_t: self.zero_field_tolerance_t,
            classical_term: self.classical_term,
            fit_offset: self.fit_offset,
            ..WeakLocalizationSettings::default()
        }
    }
}

/// A fitted offset is the analysis' default, unlike the fit's own (which fits the
/// correction as the formula states it): the points averaged into sigma(0) (within
/// zero_field_tolerance_T) already carry part of the cusp when B_phi is of the same order,
/// which biases alpha and l_phi by many times their uncertainties; the offset lets every
/// field set the zero-field reference.
fn fit_offset_default() -> bool {
    true
}

impl Analysis for WeakLocalizationAnalysis {
    const NAME: &'static str = "mr.weak_localization";
    type Params = WeakLocalizationParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Hikami-Larkin-Nagaoka fit of the low-field conductance correction of a thin film: phase-coherence length and prefactor".into(),
            description: "d_sigma(B) = sigma(B) - sigma(0) = alpha e^2/(2 pi^2 hbar) [psi(1/2 + B_phi/B) - ln(B_phi/B)], B_phi = hbar / (4 e l_phi^2) (Hikami, Larkin and Nagaoka 1980), fitted for alpha and l_phi (optionally with a classical B^2 term and an offset) over |B| <= max_field_T. HLN assumes a mean free path well below l_phi.".into(),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                ColumnSpec::new("field_T", F64, Some("T"), "field"),
                ColumnSpec::new("delta_sigma_S", F64, Some("S"), "sigma(B) - sigma(0)"),
                ColumnSpec::new("delta_sigma_S_unc", F64, Some("S"), "standard uncertainty"),
                ColumnSpec::new("model_S", F64, Some("S"), "the fitted correction"),
                ColumnSpec::new("fitted", Bool, None, "inside the fitted range"),
            ],
            summary_keys: vec![
                ColumnSpec::new("sample", ColumnType::Str, None, "the sweep's sample"),
                ColumnSpec::new("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                ColumnSpec::new("phase_coherence_field_T", ColumnType::F64, Some("T"), "B_phi = hbar / (4 e l_phi^2)"),
                ColumnSpec::new("zero_field_conductance_S", ColumnType::F64, Some("S"), "sigma(0) of the fitted sweep"),
                ColumnSpec::new("classical_S_per_T2", ColumnType::F64, Some("S_per_T2"), "coefficient of the classical B^2 term, null when not fitted"),
                ColumnSpec::new("fitted_points", ColumnType::I64, None, "points fitted"),
                ColumnSpec::new("phase_coherence_length_m", F64, Some("m"), "l_phi, with _unc"),
                ColumnSpec::new("alpha", F64, None, "HLN prefactor (-1/2 for one channel with strong spin-orbit coupling), with _unc"),
                super::classical::single_field_sign_key(),
                ColumnSpec::new("reduced_chi_square", F64, None, "chi^2 / nu against the stated uncertainties; null when the data carry none (the residuals then set the noise scale, and chi-square tests nothing)"),
                ColumnSpec::new("chi_square_p_value", F64, None, "P(chi^2 >= observed) when rho_xx_ohm_sq_unc weights the fit, else null"),
                ColumnSpec::new("birge_ratio", F64, None, "sqrt(chi^2 / nu) when above 1 (the uncertainties were multiplied by it), else 1; null without stated uncertainties"),
            ],
            figures: crate::figures::weak_localization(),
            ..Default::default()
        }
    }

    fn run(params: WeakLocalizationParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let grouping = params.temperatures.grouping();
        let table = single_sweep(inputs.required("sweep")?, &grouping)?;
        let sweep = WeakLocalizationSweep {
            field_t: table.points.iter().map(|p| p.field_t).collect(),
            rho_xx_ohm_sq: table.points.iter().map(|p| p.rho_xx_ohm_sq).collect(),
            rho_xy_ohm: Some(table.points.iter().map(|p| p.rho_xy_ohm).collect()),
            rho_xx_unc_ohm_sq: table
                .points
                .iter()
                .map(|p| p.uncertainty.map(|u| u.rho_xx_ohm_sq))
                .collect::<Option<Vec<f64>>>(),
        };
        let settings = params.settings();
        host.check_cancelled()?;
        let fit = fit_weak_localization(&sweep, &settings).map_err(|e| invalid(e.to_string()))?;
        let curve = &fit.curve;
        let mut out = OutputBuilder::of::<Self>();
        out.f64("field_T", curve.iter().map(|p| p.field_t).collect())
            .f64("delta_sigma_S", curve.iter().map(|p| p.delta_sigma_s).collect())
            .f64_nullable("delta_sigma_S_unc", curve.iter().map(|p| p.delta_sigma_unc_s).collect())
            .f64("model_S", curve.iter().map(|p| p.model_s).collect())
            .bool("fitted", curve.iter().map(|p| p.fitted).collect());
        out.summary_map(table.identity())
            .summary("phase_coherence_length_m", fit.phase_coherence_length_m)
            .summary("phase_coherence_length_m_unc", fit.phase_coherence_length_unc_m)
            .summary("phase_coherence_field_T", fit.phase_coherence_field_t)
            .summary("alpha", fit.alpha)
            .summary("alpha_unc", fit.alpha_unc)
            .summary("classical_S_per_T2", fit.classical_s_per_t2)
            .summary("zero_field_conductance_S", fit.zero_field_conductance_s)
            .summary(
                "reduced_chi_square",
                fit.quality.as_ref().map(|_| fit.reduced_chi_square),
            )
            // p-value and Birge ratio only mean something against stated errors.
            .summary("chi_square_p_value", fit.quality.as_ref().map(|q| q.p_value))
            .summary("birge_ratio", fit.quality.as_ref().map(|q| q.birge_ratio))
            .summary("fitted_points", fit.fitted_points)
            .summary("single_field_sign", fit.single_field_sign)
            .warnings(table.warnings.iter().cloned())
            .warnings(fit.warnings.iter().cloned());
        out.finish(curve.len())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_physics::forward::oscillations::{OscillationComponent, SdhModel};
    use mobilis_sdk::sdk::run_typed;
    use polars::prelude::*;

    fn text(frame: &DataFrame, name: &str) -> Vec<String> {
        let column = frame.column(name).unwrap().str().unwrap().clone();
        column.iter().map(|v| v.unwrap_or_default().to_owned()).collect()
    }

    fn numbers(frame: &DataFrame, name: &str) -> Vec<Option<f64>> {
        frame.column(name).unwrap().f64().unwrap().iter().collect()
    }

    /// The mass_fit rows are A_0 R_T of each window's own fit: at the measured temperatures
    /// they pass through the window's amplitudes (noise-free sweeps, so within 2 %), and the
    /// curve spans the measured temperatures.
    #[test]
    fn mass_fit_rows_trace_each_windows_lifshitz_kosevich_fit() {
        // A 2D gas with F = 10 T, m* = 0.067 m0, T_D = 0.5 K over a smooth background.
        let model = SdhModel {
            background_ohm_sq: vec![100.0, 0.0, 3.0, -0.1],
            components: vec![OscillationComponent {
                amplitude: 0.2,
                ..OscillationComponent::two_dimensional(10.0, 0.067, 0.5)
            }],
        };
        let temperatures = [1.5, 3.0, 6.0, 10.0];
        let (mut field, mut rho_xx, mut rho_xy, mut temperature) = (vec![], vec![], vec![], vec![]);
        for &t in &temperatures {
            for k in -1500..=1500 {
                let b = 9.0 * k as f64 / 1500.0;
                field.push(b);
                rho_xx.push(model.rho_xx_ohm_sq(b, t));
                rho_xy.push(-50.0 * b);
                temperature.push(t);
            }
        }
        let rows = field.len();
        let sweep = DataFrame::new(
            rows,
            vec![
                Column::new("field_T".into(), field),
                Column::new("rho_xx_ohm_sq".into(), rho_xx),
                Column::new("rho_xy_ohm".into(), rho_xy),
                Column::new("temperature_K".into(), temperature),
            ],
        )
        .unwrap();
        let inputs = Inputs::from_tables([("sweep".to_string(), sweep)]);
        let output = run_typed::<OscillationsAnalysis>("{}", &inputs, &Host::detached()).unwrap();
        // The budget: _unc is the quadrature sum of _unc_stat and _unc_sys, and the
        // calibrations not stated are named.
        let summary = &output.summary;
        for key in [
            "frequency_T",
            "sheet_density_m2",
            "effective_mass_ratio",
            "dingle_temperature_K",
        ] {
            let total = summary[&format!("{key}_unc")].as_f64().unwrap();
            let stat = summary[&format!("{key}_unc_stat")].as_f64().unwrap();
            let sys = summary[&format!("{key}_unc_sys")].as_f64().unwrap();
            assert!((total - stat.hypot(sys)).abs() <= 1e-12 * total, "{key}: {summary:?}");
        }
        assert_eq!(
            summary["calibrations_not_stated"],
            json!(["field_calibration_rel", "temperature_accuracy_K"])
        );
        assert!(output.warnings.iter().any(|w| w.contains("no calibration was stated")));
        let table = &output.table;
        let kinds = text(table, "kind");
        let t = numbers(table, "temperature_K");
        let b = numbers(table, "field_T");
        let value = numbers(table, "value_ohm_sq");
        let fit_rows: Vec<usize> = (0..kinds.len()).filter(|&i| kinds[i] == "mass_fit").collect();
        let mass_rows: Vec<usize> = (0..kinds.len()).filter(|&i| kinds[i] == "mass").collect();
        assert!(!mass_rows.is_empty() && !fit_rows.is_empty(), "kinds: {kinds:?}");
        assert_eq!(fit_rows.len() % MASS_FIT_POINTS, 0);
        // Dingle rows stay last (their ordinate column is filled from the end).
        let first_dingle = kinds.iter().position(|k| k == "dingle").unwrap_or(kinds.len());
        assert!(fit_rows.iter().all(|&i| i < first_dingle));
        for &row in &mass_rows {
            let curve: Vec<usize> = fit_rows.iter().copied().filter(|&i| b[i] == b[row]).collect();
            assert_eq!(curve.len(), MASS_FIT_POINTS, "window at {:?} T", b[row]);
            let temperature = t[row].unwrap();
            let (low, high) = (t[curve[0]].unwrap(), t[*curve.last().unwrap()].unwrap());
            assert!(low < temperature && temperature < high);
            // Linear interpolation of the fitted curve at the measured temperature.
            let k = curve.windows(2).position(|w| t[w[1]].unwrap() >= temperature).unwrap();
            let (t0, t1) = (t[curve[k]].unwrap(), t[curve[k + 1]].unwrap());
            let (a0, a1) = (value[curve[k]].unwrap(), value[curve[k + 1]].unwrap());
            let fitted = a0 + (a1 - a0) * (temperature - t0) / (t1 - t0);
            let measured = value[row].unwrap();
            assert!(
                (fitted - measured).abs() <= 0.02 * measured.abs().max(1e-3),
                "T = {temperature} K, B = {:?}: fit {fitted} against {measured}",
                b[row]
            );
        }
    }

    /// The Dingle and Landau-fan rows carry their fitted lines: the dingle_fit slope is
    /// -c m* T_D with the reported m* and T_D (c = 2 pi^2 k_B m0 / (hbar e)), and the
    /// landau_fit slope is the fan's frequency, which agrees with the FFT's F; every extremum
    /// lies on the fan line (noise-free sweeps of a 2D gas with F = 10 T, m* = 0.067 m0,
    /// T_D = 0.5 K).
    #[test]
    fn dingle_and_landau_rows_carry_their_fitted_lines() {
        use mobilis_physics::forward::oscillations::LK_FIELD_PER_KELVIN;
        let model = SdhModel {
            background_ohm_sq: vec![100.0, 0.0, 3.0, -0.1],
            components: vec![OscillationComponent {
                amplitude: 0.2,
                ..OscillationComponent::two_dimensional(10.0, 0.067, 0.5)
            }],
        };
        let (mut field, mut rho_xx, mut temperature) = (vec![], vec![], vec![]);
        for t in [1.5, 3.0, 6.0] {
            for k in -1500..=1500 {
                let b = 9.0 * k as f64 / 1500.0;
                field.push(b);
                rho_xx.push(model.rho_xx_ohm_sq(b, t));
                temperature.push(t);
            }
        }
        let rows = field.len();
        let sweep = DataFrame::new(
            rows,
            vec![
                Column::new(
                    "rho_xy_ohm".into(),
                    field.iter().map(|b| -50.0 * b).collect::<Vec<f64>>(),
                ),
                Column::new("field_T".into(), field),
                Column::new("rho_xx_ohm_sq".into(), rho_xx),
                Column::new("temperature_K".into(), temperature),
            ],
        )
        .unwrap();
        let inputs = Inputs::from_tables([("sweep".to_string(), sweep)]);
        let output = run_typed::<OscillationsAnalysis>(r#"{"landau_fan": true}"#, &inputs, &Host::detached()).unwrap();
        let summary = &output.summary;
        let table = &output.table;
        let kinds = text(table, "kind");
        let x = numbers(table, "inverse_field_per_T");
        let ordinate = numbers(table, "dingle_ordinate");
        let index = numbers(table, "landau_index");
        let of = |kind: &str| -> Vec<usize> { (0..kinds.len()).filter(|&i| kinds[i] == kind).collect() };
        let slope = |rows: &[usize], y: &[Option<f64>]| {
            assert_eq!(rows.len(), 2, "a line of two rows");
            let (a, b) = (rows[0], rows[1]);
            (y[b].unwrap() - y[a].unwrap()) / (x[b].unwrap() - x[a].unwrap())
        };

        let dingle_fit = of("dingle_fit");
        let mass = summary["effective_mass_ratio"].as_f64().unwrap();
        let dingle_k = summary["dingle_temperature_K"].as_f64().unwrap();
        let expected = -LK_FIELD_PER_KELVIN * mass * dingle_k;
        let measured = slope(&dingle_fit, &ordinate);
        assert!(
            (measured - expected).abs() <= 1e-9 * expected.abs(),
            "{measured} against {expected}"
        );
        assert!((dingle_k - 0.5).abs() < 0.05, "T_D = {dingle_k}");
        // The line spans the windows.
        let windows = of("dingle");
        let first = windows.iter().map(|&i| x[i].unwrap()).fold(f64::INFINITY, f64::min);
        assert_eq!(x[dingle_fit[0]], Some(first));

        let fan = of("landau");
        assert!(fan.len() >= 10, "{} extrema", fan.len());
        let fan_fit = of("landau_fit");
        let frequency = summary["frequency_T"].as_f64().unwrap();
        let fan_frequency = slope(&fan_fit, &index);
        assert!(
            (fan_frequency - frequency).abs() <= 2e-3 * frequency,
            "fan {fan_frequency} T, FFT {frequency} T"
        );
        assert_eq!(x[fan_fit[0]], Some(0.0), "the fan line starts at 1/B = 0");
        let beta = index[fan_fit[0]].unwrap();
        assert_eq!(summary["landau_fan_intercept"].as_f64(), Some(beta));
        for &row in &fan {
            let on_line = fan_frequency * x[row].unwrap() + beta;
            let n = index[row].unwrap();
            assert!((n - on_line).abs() < 0.05, "extremum {n} at {:?}", x[row]);
            assert!((2.0 * n).fract() == 0.0, "integer or half-integer: {n}");
        }
        // Only these rows carry the two columns.
        for (i, kind) in kinds.iter().enumerate() {
            assert_eq!(ordinate[i].is_some(), kind.starts_with("dingle"), "row {i} ({kind})");
            assert_eq!(index[i].is_some(), kind.starts_with("landau"), "row {i} ({kind})");
        }
    }

    /// A weak-localization sweep logged along a ramp: 40,000 points at 10 Hz from 0 to 14 T,
    /// positive field only, fitted up to 0.1 T. The film is invented (sigma_0 = 1/2080.5 S,
    /// alpha = 1, l_phi = 250 nm); the fit finds l_phi within its uncertainty.
    #[test]
    fn weak_localization_runs_on_a_long_logged_ramp() {
        use mobilis_numerics::noise::Rng;
        use mobilis_physics::forward::oscillations::{synthetic_weak_localization_sweep, WeakLocalizationModel};
        use mobilis_physics::forward::tensor::SweepNoise;
        let model = WeakLocalizationModel {
            sigma_0_s: 1.0 / 2080.5,
            alpha: 1.0,
            phase_coherence_length_m: 250e-9,
            classical_s_per_t2: 0.0,
        };
        let field: Vec<f64> = (0..40_000).map(|k| 14.0 * k as f64 / 39_999.0).collect();
        let noise = SweepNoise {
            absolute_ohm: 2e-3,
            relative: 1e-5,
        };
        let rho_xx = synthetic_weak_localization_sweep(&model, &field, &noise, &mut Rng::seeded(5)).unwrap();
        let rows = field.len();
        let sweep = DataFrame::new(
            rows,
            vec![
                Column::new("field_T".into(), field),
                Column::new("rho_xx_ohm_sq".into(), rho_xx),
                Column::new("rho_xy_ohm".into(), vec![0.0; rows]),
            ],
        )
        .unwrap();
        let inputs = Inputs::from_tables([("sweep".to_string(), sweep)]);
        let output =
            run_typed::<WeakLocalizationAnalysis>(r#"{"max_field_T": 0.1}"#, &inputs, &Host::detached()).unwrap();
        let l_phi = output.summary["phase_coherence_length_m"].as_f64().unwrap();
        let unc = output.summary["phase_coherence_length_m_unc"].as_f64().unwrap();
        assert!(
            (l_phi - 250e-9).abs() < 3.0 * unc && unc < 0.05 * l_phi,
            "{l_phi} +- {unc}"
        );
        assert_eq!(output.table.height(), rows);
    }

    /// The parameters the host refuses with its validator before the plugin is called: an
    /// out-of-range value, an unknown choice and an unknown name, each named in the message.
    #[test]
    fn parameters_are_refused_by_the_hosts_validator() {
        use mobilis_sdk::param_schema::{check_supported, validate};
        let oscillations = mobilis_sdk::sdk::declaration_of::<OscillationsAnalysis>().params;
        let weak_localization = mobilis_sdk::sdk::declaration_of::<WeakLocalizationAnalysis>().params;
        for (name, schema) in [
            ("oscillations", &oscillations),
            ("weak_localization", &weak_localization),
        ] {
            check_supported(schema, name).unwrap();
        }
        let refused = |schema: &Value, params: Value, fragments: &[&str]| {
            let message = validate(schema, &params).expect_err(&params.to_string());
            for fragment in fragments {
                assert!(message.contains(fragment), "{params}: `{message}` lacks `{fragment}`");
            }
        };
        refused(&oscillations, json!({"zero_padding": 0}), &["zero_padding"]);
        refused(&oscillations, json!({"background_degree": 13}), &["background_degree"]);
        refused(&oscillations, json!({"spin_degeneracy": 0}), &["spin_degeneracy"]);
        refused(
            &oscillations,
            json!({"field_calibration_rel": 0.6}),
            &["field_calibration_rel"],
        );
        refused(
            &oscillations,
            json!({"window": "flat"}),
            &["window", "hann", "blackman"],
        );
        refused(&oscillations, json!({"mass": "guess"}), &["mass", "known"]);
        refused(
            &oscillations,
            json!({"mass_method": "fft"}),
            &["mass_method", "narrow_windows"],
        );
        refused(&oscillations, json!({"field_resolution_T": 0}), &["field_resolution_T"]);
        refused(&weak_localization, json!({"max_field_T": 0}), &["max_field_T"]);
        refused(
            &weak_localization,
            json!({"zero_field_tolerance_T": -1e-3}),
            &["zero_field_tolerance_T"],
        );
        refused(
            &weak_localization,
            json!({"temperature_relative_tolerance": 2}),
            &["temperature_relative_tolerance"],
        );
        // Symmetrization does not apply to the weak-localization fit.
        refused(
            &weak_localization,
            json!({"field_resolution_T": 1e-3}),
            &["field_resolution_T"],
        );
        for params in [
            json!({"mass": "known", "effective_mass_ratio": 0.07, "window": "blackman"}),
            json!({"background": "smoothing", "background_width_per_T": 0.3, "mass_method": "narrow_windows"}),
            json!({"field_resolution_T": 1e-3, "temperature_tolerance_K": 0.1, "field_min_T": null}),
        ] {
            validate(&oscillations, &params).unwrap();
        }
        validate(
            &weak_localization,
            &json!({"classical_term": true, "temperature_tolerance_K": 0.1}),
        )
        .unwrap();
    }

    /// Omitted parameters take the defaults the schema states: each stated default, given
    /// explicitly, yields the settings of no parameters, and those are the analysis'
    /// documented defaults.
    #[test]
    fn omitted_parameters_take_the_stated_defaults() {
        fn stated_defaults(schema: &Value) -> Vec<(String, Value)> {
            let properties = schema["properties"].as_object().unwrap();
            properties
                .iter()
                .filter_map(|(name, property)| {
                    Some((name.clone(), property.get("default").filter(|d| !d.is_null())?.clone()))
                })
                .collect()
        }
        let oscillation = |params: Value| -> OscillationParams { serde_json::from_value(params).unwrap() };
        let omitted = oscillation(json!({}));
        assert_eq!(omitted.settings().unwrap(), OscillationSettings::default());
        assert_eq!(
            omitted.sweep.settings(),
            mobilis_physics::sweep::SymmetrizeSettings::default()
        );
        let schema = mobilis_sdk::sdk::declaration_of::<OscillationsAnalysis>().params;
        let defaults = stated_defaults(&schema);
        assert_eq!(defaults.len(), 15, "{defaults:?}");
        for (name, value) in defaults {
            let given = oscillation(json!({ name.clone(): value }));
            assert_eq!(given.settings().unwrap(), omitted.settings().unwrap(), "{name}");
            assert_eq!(given.sweep.settings(), omitted.sweep.settings(), "{name}");
            assert_eq!(given.sweep.grouping(), omitted.sweep.grouping(), "{name}");
        }

        let weak = |params: Value| -> WeakLocalizationParams { serde_json::from_value(params).unwrap() };
        let omitted = weak(json!({}));
        // The analysis fits the offset by default (see fit_offset_default); the rest are the fit's.
        assert_eq!(
            omitted.settings(),
            WeakLocalizationSettings {
                fit_offset: true,
                ..WeakLocalizationSettings::default()
            }
        );
        let schema = mobilis_sdk::sdk::declaration_of::<WeakLocalizationAnalysis>().params;
        let defaults = stated_defaults(&schema);
        assert_eq!(defaults.len(), 5, "{defaults:?}");
        for (name, value) in defaults {
            let given = weak(json!({ name.clone(): value }));
            assert_eq!(given.settings(), omitted.settings(), "{name}");
            assert_eq!(given.temperatures.grouping(), omitted.temperatures.grouping(), "{name}");
        }
    }

    /// The combinations the schema cannot express are refused by the analysis, saying what
    /// to change.
    #[test]
    fn conflicting_oscillation_parameters_are_refused() {
        let settings = |params: Value| {
            serde_json::from_value::<OscillationParams>(params)
                .unwrap()
                .settings()
                .unwrap_err()
                .to_string()
        };
        assert!(settings(json!({"background": "smoothing"})).contains("needs background_width_per_T"));
        assert!(settings(json!({"background_width_per_T": 0.3})).contains("background: smoothing"));
        assert!(
            settings(json!({"background": "smoothing", "background_degree": 2, "background_width_per_T": 0.3}))
                .contains("background_degree goes with background: polynomial")
        );
        assert!(settings(json!({"mass": "known"})).contains("needs effective_mass_ratio"));
        assert!(settings(json!({"mass": "skip", "effective_mass_ratio": 0.07}))
            .contains("mass `skip` with effective_mass_ratio"));
        let known = serde_json::from_value::<OscillationParams>(json!({"effective_mass_ratio": 0.07})).unwrap();
        assert_eq!(
            known.settings().unwrap().mass,
            MassRequest::Known {
                effective_mass_ratio: 0.07
            }
        );
    }

    #[test]
    fn mass_fit_temperatures_span_the_data() {
        let grid = mass_fit_temperatures(&[2.0, 8.0, 4.0]);
        assert_eq!(grid.len(), MASS_FIT_POINTS);
        assert!((grid[0] - 1.0).abs() < 1e-12 && (grid[MASS_FIT_POINTS - 1] - 8.8).abs() < 1e-12);
        assert!(mass_fit_temperatures(&[3.0, 3.0]).is_empty());
    }
}
