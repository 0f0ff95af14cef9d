//! `mr.oscillations` and `mr.weak_localization`: the quantum corrections.
//!
//! The `mr.oscillations` table holds the curves, spectra, window amplitudes, Dingle points and
//! line and the fan, told apart by `kind`: `oscillation`, `fft`, `mass`, `mass_fit`, `dingle`,
//! `dingle_fit`, `landau` (the extrema, column `landau_index`: integer at minima of rho_xx,
//! half-integer at maxima) and `landau_fit`. Each of F, n, m*, T_D and tau_q has `_unc`,
//! `_unc_stat`, `_unc_sys`, `_unc_fit` (the fit's own error) and `_unc_analysis_spread` (the
//! spread over backgrounds and windows); the Dingle line reports `dingle_reduced_chi_square`,
//! `dingle_chi_square_p_value` and `dingle_birge_ratio`.

use super::*;
use crate::oscillations::{
    analyze_oscillations, Background, MassMethod, MassRequest, OscillationAnalysis, OscillationError,
    OscillationSettings, OscillationSweep,
};
use crate::weak_localization::{fit_weak_localization, WeakLocalizationSettings, WeakLocalizationSweep};
use mobilis_numerics::fft::Window;
use mobilis_numerics::fit::FitQuality;
use mobilis_physics::forward::oscillations::thermal_damping_factor;
use mobilis_physics::sweep::{symmetrize, SweepUse};
use mobilis_sdk::abi::AnalysisDeclaration;
use mobilis_sdk::sdk::{Analysis, AnalysisOutput, Host, Inputs};
use mobilis_sdk::sweep_table::{
    single_sweep, sweep_role, sweep_schema_properties, sweeps_by_temperature, SweepParams, SweepTable,
    TemperatureGroupingParams, DEFAULT_TEMPERATURE_RELATIVE_TOLERANCE, DEFAULT_TEMPERATURE_TOLERANCE_K,
};
use serde::Deserialize;
use serde_json::{json, Value};

pub struct OscillationsAnalysis;

#[derive(Debug, Deserialize, schemars::JsonSchema)]
pub struct OscillationParams {
    #[serde(flatten)]
    sweep: SweepParams,
    #[serde(rename = "field_min_T", default)]
    field_min_t: Option<f64>,
    #[serde(rename = "field_max_T", default)]
    field_max_t: Option<f64>,
    #[serde(default)]
    background: Option<String>,
    #[serde(default)]
    background_degree: Option<usize>,
    #[serde(rename = "background_width_per_T", default)]
    background_width_per_t: Option<f64>,
    #[serde(default)]
    window: Option<String>,
    #[serde(default)]
    zero_padding: Option<usize>,
    #[serde(default)]
    frequencies: Option<usize>,
    #[serde(default)]
    spin_degeneracy: Option<f64>,
    #[serde(default)]
    mass: Option<String>,
    #[serde(default)]
    effective_mass_ratio: Option<f64>,
    #[serde(default)]
    mass_method: Option<String>,
    #[serde(default)]
    dingle: Option<bool>,
    #[serde(default)]
    landau_fan: Option<bool>,
    #[serde(default)]
    model_spread: Option<bool>,
    #[serde(default)]
    field_calibration_rel: Option<f64>,
    #[serde(rename = "temperature_accuracy_K", default)]
    temperature_accuracy_k: Option<f64>,
    #[serde(rename = "temperature_stability_K", default)]
    temperature_stability_k: Option<f64>,
}

impl OscillationParams {
    fn settings(&self) -> Result<OscillationSettings, AnalysisError> {
        let mut settings = OscillationSettings::default();
        settings.field_min_t = self.field_min_t;
        settings.field_max_t = self.field_max_t;
        settings.background = match (
            self.background.as_deref(),
            self.background_degree,
            self.background_width_per_t,
        ) {
            (None | Some("polynomial"), degree, None) => Background::Polynomial {
                degree: degree.unwrap_or(3),
            },
            (Some("smoothing"), None, Some(width)) => Background::Smoothing { width_inverse_t: width },
            (Some("smoothing"), None, None) => {
                return Err(invalid(
                    "background: smoothing needs background_width_per_T (several periods 1/F)",
                ))
            }
            (Some(other), _, _) if other != "polynomial" && other != "smoothing" => {
                return Err(invalid(format!(
                    "background `{other}` is unknown; use polynomial or smoothing"
                )))
            }
            _ => return Err(invalid(
                "background_degree goes with background: polynomial, background_width_per_T with background: smoothing",
            )),
        };
        settings.window = match self.window.as_deref() {
            None | Some("hann") => Window::Hann,
            Some("rectangular") => Window::Rectangular,
            Some("blackman") => Window::Blackman,
            Some(other) => {
                return Err(invalid(format!(
                    "window `{other}` is unknown; use hann, rectangular or blackman"
                )))
            }
        };
        if let Some(padding) = self.zero_padding {
            settings.zero_padding = padding;
        }
        if let Some(count) = self.frequencies {
            settings.frequencies = count;
        }
        if let Some(g) = self.spin_degeneracy {
            settings.spin_degeneracy = g;
        }
        settings.mass = match (self.mass.as_deref(), self.effective_mass_ratio) {
            (None | Some("auto"), None) => MassRequest::Auto,
            (Some("fit"), None) => MassRequest::Fit,
            (Some("skip"), None) => MassRequest::Skip,
            (None | Some("known"), Some(ratio)) => MassRequest::Known {
                effective_mass_ratio: ratio,
            },
            (Some("known"), None) => return Err(invalid("mass: known needs effective_mass_ratio")),
            (Some(other), _) => {
                return Err(invalid(format!(
                    "mass `{other}` with effective_mass_ratio: give mass: known, or leave effective_mass_ratio out"
                )))
            }
        };
        settings.mass_method = match self.mass_method.as_deref() {
            None | Some("waveform_fit") => MassMethod::WaveformFit,
            Some("narrow_windows") => MassMethod::NarrowWindows,
            Some(other) => {
                return Err(invalid(format!(
                    "mass_method `{other}` is unknown; use waveform_fit or narrow_windows"
                )))
            }
        };
        if let Some(dingle) = self.dingle {
            settings.dingle = dingle;
        }
        if let Some(fan) = self.landau_fan {
            settings.landau_fan = fan;
        }
        if let Some(spread) = self.model_spread {
            settings.model_spread = spread;
        }
        settings.field_calibration_rel = self.field_calibration_rel;
        settings.temperature_accuracy_k = self.temperature_accuracy_k;
        settings.temperature_stability_k = self.temperature_stability_k;
        Ok(settings)
    }
}

impl Analysis for OscillationsAnalysis {
    const NAME: &'static str = "mr.oscillations";
    type Params = OscillationParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        let mut p = sweep_schema_properties();
        p.insert("field_min_T".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "lower end of the field window; default the larger of the lowest positive field and B_max / 10"}));
        p.insert("field_max_T".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "upper end of the field window; default the largest field"}));
        p.insert("background".into(), json!({"type": "string", "enum": ["polynomial", "smoothing"], "default": "polynomial", "description": "how the smooth background is removed: a polynomial in B, or a smoothing in 1/B"}));
        p.insert(
            "background_degree".into(),
            json!({"type": "integer", "minimum": 0, "maximum": 12, "default": 3}),
        );
        p.insert("background_width_per_T".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "smoothing half-width in 1/B, several periods 1/F"}));
        p.insert("window".into(), json!({"type": "string", "enum": ["hann", "rectangular", "blackman"], "default": "hann", "description": "FFT window"}));
        p.insert("zero_padding".into(), json!({"type": "integer", "minimum": 1, "maximum": 64, "default": 8, "description": "FFT zero-padding factor"}));
        p.insert("frequencies".into(), json!({"type": "integer", "minimum": 1, "maximum": 10, "default": 1, "description": "dominant frequencies to report"}));
        p.insert(
            "spin_degeneracy".into(),
            json!({"type": "number", "exclusiveMinimum": 0, "default": 2, "description": "g_s of n = g_s e F / h"}),
        );
        p.insert("mass".into(), json!({"type": "string", "enum": ["auto", "fit", "known", "skip"], "default": "auto", "description": "effective mass: fitted from the temperature dependence (auto: when several temperatures), given (known, with effective_mass_ratio), or skipped"}));
        p.insert("effective_mass_ratio".into(), json!({"type": "number", "exclusiveMinimum": 0, "description": "m*/m0 for mass: known (the Dingle analysis needs a mass)"}));
        p.insert("mass_method".into(), json!({"type": "string", "enum": ["waveform_fit", "narrow_windows"], "default": "waveform_fit", "description": "fit the damped waveform across temperatures, or fit the Lifshitz-Kosevich damping in narrow 1/B windows each with its own field; both avoid the bias of one wide FFT window"}));
        p.insert("dingle".into(), json!({"type": "boolean", "default": true, "description": "Dingle temperature and quantum lifetime from the amplitude's field dependence"}));
        p.insert("landau_fan".into(), json!({"type": "boolean", "default": false, "description": "Landau-level fan of the extrema for the phase"}));
        p.insert("model_spread".into(), json!({"type": "boolean", "default": true, "description": "repeat the analysis with higher background degrees (or other smoothing widths) and a shorter field window, and add the spread of F, m* and T_D beyond their noise to the statistical uncertainty"}));
        p.insert("field_calibration_rel".into(), json!({"type": "number", "minimum": 0, "maximum": 0.5, "description": "relative standard uncertainty of the magnet's field calibration (Type B); scales F, n and m*. Not given: 0.005 is assumed and listed in calibrations_not_stated"}));
        p.insert("temperature_stability_K".into(), json!({"type": "number", "minimum": 0, "description": "standard uncertainty of each sweep's own temperature (stage drift, setpoint scatter), independent from sweep to sweep; moves m* and T_D in the statistical part. Not included when not given"}));
        p.insert("temperature_accuracy_K".into(), json!({"type": "number", "minimum": 0, "description": "standard uncertainty of the thermometer, common to every sweep (Type B); moves m* and T_D. Not given: 0.02 K is assumed and listed in calibrations_not_stated"}));
        AnalysisDeclaration {
            name: String::new(),
            summary: "Shubnikov-de Haas analysis: frequencies and 2D densities, the effective mass from the thermal damping, the Dingle temperature and quantum lifetime".into(),
            description: "Each temperature's sweep is symmetrized; the background is removed (polynomial in B or smoothing), the oscillation resampled on a uniform 1/B grid and transformed (windowed, zero-padded FFT). n = g_s e F / h (Onsager). The mass comes from the Lifshitz-Kosevich factor X / sinh X, X = 2 pi^2 k_B T m* / (hbar e B), fitted where each amplitude has its own effective field, never from one wide-window FFT amplitude (which mixes very different damping); the Dingle temperature from ln(A sinh X / X) against 1/B, tau_q = hbar / (2 pi k_B T_D). Each result's _unc is the total standard uncertainty: _unc_stat (the fit's scatter-scaled error and the spread over higher background degrees and a shorter window) and _unc_sys (the stated field_calibration_rel and temperature_accuracy_K) in quadrature.".into(),
            params: json!({"type": "object", "additionalProperties": false, "properties": p}),
            inputs: vec![sweep_role(true)],
            outputs: vec![
                column("kind", Str, None, "oscillation (the curve), fft (the spectrum), mass (window amplitudes), mass_fit (each window's Lifshitz-Kosevich fit A_0 R_T on a temperature grid), dingle (Dingle plot windows), dingle_fit (the fitted Dingle line at the first and last window), landau (extrema of the Landau fan, with landau_fan) or landau_fit (the fan's fitted line at 1/B = 0 and at the last extremum)"),
                column("temperature_K", F64, Some("K"), "temperature of the sweep"),
                column("field_T", F64, Some("T"), "field (oscillation rows) or effective field (mass and mass_fit rows)"),
                column("inverse_field_per_T", F64, None, "1/B, 1/T (oscillation, dingle, dingle_fit, landau and landau_fit rows)"),
                column("frequency_T", F64, Some("T"), "frequency (fft rows)"),
                column("rho_xx_ohm_sq", F64, Some("ohm_sq"), "symmetrized rho_xx (oscillation rows)"),
                column("background_ohm_sq", F64, Some("ohm_sq"), "removed background (oscillation rows)"),
                column("value_ohm_sq", F64, Some("ohm_sq"), "the oscillation (oscillation rows), amplitude (fft, mass and dingle rows) or fitted amplitude (mass_fit rows)"),
                column("value_ohm_sq_unc", F64, Some("ohm_sq"), "amplitude uncertainty (mass and dingle rows)"),
                column("dingle_ordinate", F64, None, "ln(A sinh X / X), A in ohm per square (dingle rows; the fitted line on dingle_fit rows)"),
                column("landau_index", F64, None, "Landau level index: integer at minima of rho_xx, half-integer at maxima (landau rows); F_fan / B + beta on landau_fit rows"),
            ],
            summary_keys: vec![
                column("lines", ColumnType::Str, None, "list of {frequency_T, sheet_density_m2, ...} with _unc: one entry per frequency found"),
                column("sample", ColumnType::Str, None, "the series' sample"),
                column("temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures of the series"),
                column("single_field_sign_temperatures_K", ColumnType::F64, Some("K"), "list of the temperatures measured at one field sign"),
                column("field_window_T", ColumnType::F64, Some("T"), "[lowest, highest] field analysed"),
                column("resolution_T", ColumnType::F64, Some("T"), "frequency resolution of the transform"),
                column("mass_method", ColumnType::Str, None, "how the effective mass was obtained"),
                column("dingle_reduced_chi_square", ColumnType::F64, None, "chi^2 / nu of the Dingle fit"),
                column("dingle_chi_square_p_value", ColumnType::F64, None, "P(chi^2 >= observed) of the Dingle fit"),
                column("dingle_birge_ratio", ColumnType::F64, None, "sqrt(chi^2 / nu) of the Dingle fit when above 1"),
                column("landau_fan_intercept", ColumnType::F64, None, "intercept of the Landau fan, with _unc"),
                column("landau_fan_phase_rad", ColumnType::F64, Some("rad"), "Berry-phase offset of the Landau fan"),
                column("waveform_residual_rms_ohm_sq", ColumnType::F64, Some("ohm_sq"), "rms residual of the waveform fit"),
                column("frequency_T", F64, Some("T"), "the dominant frequency, with _unc"),
                column("sheet_density_m2", F64, Some("m2"), "g_s e F / h, with _unc"),
                column("effective_mass_ratio", F64, None, "m*/m0, with _unc"),
                column("dingle_temperature_K", F64, Some("K"), "with _unc"),
                column("quantum_lifetime_s", F64, Some("s"), "hbar / (2 pi k_B T_D), with _unc"),
                super::classical::single_field_sign_key(),
                column("calibrations_not_stated", Str, None, "the calibration parameters not stated, whose common-practice values were assumed in the _unc_sys parts (JSON list)"),
                column("uncertainty_checks", Str, None, "the repeated analyses whose spread is in the _unc_stat parts (JSON list)"),
            ],
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
        let mut output = AnalysisOutput::new(oscillation_table(&analysis)?);
        fill_oscillation_summary(&mut output.summary, &analysis, &tables, &symmetrized.sweeps);
        super::classical::report_series_field_signs(
            &mut output,
            &symmetrized.single_sign_temperatures,
            symmetrized.warnings,
        );
        output.warnings.extend(analysis.warnings.iter().cloned());
        host.progress(1.0, "done");
        Ok(output)
    }
}

/// The sweeps symmetrized in field, their positive-field halves ready for the analysis,
/// with the sweeps' warnings and the temperatures measured on one field sign only.
struct SymmetrizedSweeps {
    sweeps: Vec<OscillationSweep>,
    warnings: Vec<String>,
    single_sign_temperatures: Vec<f64>,
}

/// Each sweep symmetrized (rho_xx even in B) and cut to B > 0.
fn symmetrized_sweeps(params: &OscillationParams, tables: &[SweepTable]) -> Result<SymmetrizedSweeps, AnalysisError> {
    let symmetrize_settings = params.sweep.settings();
    let mut sweeps = Vec::with_capacity(tables.len());
    let mut sweep_warnings: Vec<String> = Vec::new();
    let mut single_sign_temperatures: Vec<f64> = Vec::new();
    for table in tables {
        let temperature_k = table
            .temperature_k
            .ok_or_else(|| invalid("mr.oscillations needs temperature_K for every sweep"))?;
        let symmetrized = symmetrize(&table.points, &symmetrize_settings)
            .map_err(|e| invalid(format!("sweep at {temperature_k} K: {e}")))?;
        if symmetrized.single_field_sign {
            single_sign_temperatures.push(temperature_k);
        }
        sweep_warnings.extend(table.warnings.iter().cloned());
        sweep_warnings.extend(
            symmetrized
                .warnings(SweepUse::EvenRhoXx)
                .into_iter()
                .filter(|w| !w.starts_with("single_field_sign"))
                .map(|w| format!("sweep at {temperature_k} K: {w}")),
        );
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
        warnings: sweep_warnings,
        single_sign_temperatures,
    })
}

/// The rows of the long table, a `kind` per plot, in the eight shared value columns
/// (temperature, field, 1/B, frequency, rho_xx, background, value, its uncertainty).
#[derive(Default)]
struct PlotRows {
    kind: Vec<&'static str>,
    cells: [Vec<Option<f64>>; 8],
}

impl PlotRows {
    fn push(&mut self, k: &'static str, values: [Option<f64>; 8]) {
        self.kind.push(k);
        for (cell, value) in self.cells.iter_mut().zip(values) {
            cell.push(value);
        }
    }
}

/// A row of the Dingle plot or the Landau fan: its kind, its shared cells, and its
/// `dingle_ordinate` and `landau_index`.
type LineRow = (&'static str, [Option<f64>; 8], Option<f64>, Option<f64>);

/// One long table, a `kind` per plot.
fn oscillation_table(analysis: &OscillationAnalysis) -> Result<DataFrame, AnalysisError> {
    let mut rows = PlotRows::default();
    push_sweep_rows(&mut rows, analysis);
    push_mass_rows(&mut rows, analysis);
    // The Dingle plot and the Landau fan come last: their rows alone carry dingle_ordinate
    // and landau_index. Each has its fitted line as two rows, so that a figure draws the
    // line the analysis fitted rather than one of its own.
    let tail = line_rows(analysis);
    let tail_ordinates: Vec<Option<f64>> = tail.iter().map(|row| row.2).collect();
    let tail_indices: Vec<Option<f64>> = tail.iter().map(|row| row.3).collect();
    for (k, values, _, _) in tail {
        rows.push(k, values);
    }
    let PlotRows { kind, cells } = rows;
    let rows = kind.len();
    let mut ordinate = vec![None; rows - tail_ordinates.len()];
    ordinate.extend(tail_ordinates);
    let mut landau_index = vec![None; rows - tail_indices.len()];
    landau_index.extend(tail_indices);
    let [t, b, inv, f, rho, bg, value, unc] = cells;
    frame(
        rows,
        vec![
            Column::new("kind".into(), kind),
            optional("temperature_K", t),
            optional("field_T", b),
            optional("inverse_field_per_T", inv),
            optional("frequency_T", f),
            optional("rho_xx_ohm_sq", rho),
            optional("background_ohm_sq", bg),
            optional("value_ohm_sq", value),
            optional("value_ohm_sq_unc", unc),
            optional("dingle_ordinate", ordinate),
            optional("landau_index", landau_index),
        ],
    )
}

/// The oscillation of every sweep and the spectra.
fn push_sweep_rows(rows: &mut PlotRows, analysis: &OscillationAnalysis) {
    let mut push = |k: &'static str, values: [Option<f64>; 8]| rows.push(k, values);
    for curve in &analysis.curves {
        for i in 0..curve.field_t.len() {
            push(
                "oscillation",
                [
                    Some(curve.temperature_k),
                    Some(curve.field_t[i]),
                    Some(curve.inverse_field_per_t[i]),
                    None,
                    Some(curve.rho_xx_ohm_sq[i]),
                    Some(curve.background_ohm_sq[i]),
                    Some(curve.oscillation_ohm_sq[i]),
                    None,
                ],
            );
        }
    }
    for spectrum in &analysis.spectra {
        for (f, a) in spectrum.frequencies_t.iter().zip(&spectrum.amplitudes_ohm_sq) {
            push(
                "fft",
                [
                    Some(spectrum.temperature_k),
                    None,
                    None,
                    Some(*f),
                    None,
                    None,
                    Some(*a),
                    None,
                ],
            );
        }
    }
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
    summary: &mut serde_json::Map<String, Value>,
    analysis: &OscillationAnalysis,
    tables: &[SweepTable],
    sweeps: &[OscillationSweep],
) {
    let summary_values = analysis.summary();
    if let Some(sample) = &tables[0].sample {
        summary.insert("sample".into(), json!(sample));
    }
    summary.insert(
        "temperatures_K".into(),
        json!(sweeps.iter().map(|s| s.temperature_k).collect::<Vec<_>>()),
    );
    summary.insert("frequency_T".into(), json!(summary_values.frequency_t));
    summary.insert("frequency_T_unc".into(), json!(summary_values.frequency_unc_t));
    summary.insert("sheet_density_m2".into(), json!(summary_values.sheet_density_m2));
    summary.insert(
        "sheet_density_m2_unc".into(),
        json!(summary_values.sheet_density_unc_m2),
    );
    summary.insert(
        "effective_mass_ratio".into(),
        json!(summary_values.effective_mass_ratio),
    );
    summary.insert(
        "effective_mass_ratio_unc".into(),
        json!(summary_values.effective_mass_ratio_unc),
    );
    summary.insert("mass_method".into(), json!(summary_values.mass_method));
    summary.insert(
        "dingle_temperature_K".into(),
        json!(summary_values.dingle_temperature_k),
    );
    summary.insert(
        "dingle_temperature_K_unc".into(),
        json!(summary_values.dingle_temperature_unc_k),
    );
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
            summary.insert(format!("{key}_unc_stat"), json!(budget.statistical));
            summary.insert(format!("{key}_unc_sys"), json!(budget.systematic));
            summary.insert(format!("{key}_unc_fit"), json!(budget.fit));
            summary.insert(format!("{key}_unc_analysis_spread"), json!(budget.analysis_spread));
        }
    }
    summary.insert(
        "calibrations_not_stated".into(),
        json!(analysis.budget.calibrations_not_stated),
    );
    summary.insert("uncertainty_checks".into(), json!(analysis.budget.variants));
    if let Some(plot) = &analysis.dingle {
        // The Dingle line is weighted by its windows' amplitude errors; its slope's error
        // was scaled by the Birge ratio when chi^2 / nu > 1.
        let nu = plot.points.len().saturating_sub(2);
        let quality = FitQuality::assess(plot.reduced_chi_square * nu as f64, nu);
        summary.insert(
            "dingle_reduced_chi_square".into(),
            json!(finite_or_null(quality.reduced_chi_square)),
        );
        summary.insert(
            "dingle_chi_square_p_value".into(),
            json!(finite_or_null(quality.p_value)),
        );
        summary.insert("dingle_birge_ratio".into(), json!(quality.birge_ratio));
    }
    if let Some(fit) = &analysis.waveform {
        // The waveform fit weights every point alike and scales its errors by the
        // residual scatter: its reduced chi-square is that scatter's variance.
        summary.insert(
            "waveform_residual_rms_ohm_sq".into(),
            json!(fit.reduced_chi_square.max(0.0).sqrt()),
        );
    }
    summary.insert("quantum_lifetime_s".into(), json!(summary_values.quantum_lifetime_s));
    summary.insert(
        "quantum_lifetime_s_unc".into(),
        json!(summary_values.quantum_lifetime_unc_s),
    );
    summary.insert(
        "field_window_T".into(),
        json!([analysis.field_window_t.0, analysis.field_window_t.1]),
    );
    summary.insert("resolution_T".into(), json!(analysis.resolution_t));
    summary.insert(
        "lines".into(),
        Value::Array(
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
        summary.insert("landau_fan_intercept".into(), json!(fan.intercept));
        summary.insert("landau_fan_intercept_unc".into(), json!(fan.intercept_unc));
        summary.insert("landau_fan_phase_rad".into(), json!(fan.phase_rad));
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

#[derive(Debug, Deserialize, schemars::JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct WeakLocalizationParams {
    #[serde(rename = "max_field_T", default)]
    max_field_t: Option<f64>,
    #[serde(rename = "zero_field_tolerance_T", default)]
    zero_field_tolerance_t: Option<f64>,
    #[serde(default)]
    classical_term: bool,
    #[serde(default = "fit_offset_default")]
    fit_offset: bool,
    #[serde(rename = "temperature_tolerance_K", default)]
    temperature_tolerance_k: Option<f64>,
    #[serde(default)]
    temperature_relative_tolerance: Option<f64>,
}

/// A fitted offset is the default: the points averaged into sigma(0) (within
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
            params: json!({"type": "object", "additionalProperties": false, "properties": {
                "max_field_T": {"type": "number", "exclusiveMinimum": 0, "description": "fit up to this field; default the whole sweep"},
                "zero_field_tolerance_T": {"type": "number", "minimum": 0, "default": 1e-3, "description": "|B| at or below this gives sigma(0)"},
                "classical_term": {"type": "boolean", "default": false, "description": "also fit a classical -c B^2 term"},
                "fit_offset": {"type": "boolean", "default": true, "description": "fit an offset of sigma(0) instead of trusting the zero-field average (which already holds part of the cusp when B_phi is small)"},
                "temperature_tolerance_K": sweep_schema_properties()["temperature_tolerance_K"],
                "temperature_relative_tolerance": sweep_schema_properties()["temperature_relative_tolerance"]
            }}),
            inputs: vec![sweep_role(false)],
            outputs: vec![
                column("field_T", F64, Some("T"), "field"),
                column("delta_sigma_S", F64, Some("S"), "sigma(B) - sigma(0)"),
                column("delta_sigma_S_unc", F64, Some("S"), "standard uncertainty"),
                column("model_S", F64, Some("S"), "the fitted correction"),
                column("fitted", Bool, None, "inside the fitted range"),
            ],
            summary_keys: vec![
                column("sample", ColumnType::Str, None, "the sweep's sample"),
                column("temperature_K", ColumnType::F64, Some("K"), "the sweep's temperature"),
                column("phase_coherence_field_T", ColumnType::F64, Some("T"), "B_phi = hbar / (4 e l_phi^2)"),
                column("zero_field_conductance_S", ColumnType::F64, Some("S"), "sigma(0) of the fitted sweep"),
                column("classical_S_per_T2", ColumnType::F64, Some("S_per_T2"), "coefficient of the classical B^2 term, null when not fitted"),
                column("fitted_points", ColumnType::I64, None, "points fitted"),
                column("phase_coherence_length_m", F64, Some("m"), "l_phi, with _unc"),
                column("alpha", F64, None, "HLN prefactor (-1/2 for one channel with strong spin-orbit coupling), with _unc"),
                super::classical::single_field_sign_key(),
                column("reduced_chi_square", F64, None, "chi^2 / nu of the fit"),
                column("chi_square_p_value", F64, None, "P(chi^2 >= observed) when rho_xx_ohm_sq_unc weights the fit, else null"),
                column("birge_ratio", F64, None, "sqrt(chi^2 / nu) when above 1 (the uncertainties were multiplied by it), else 1; null without stated uncertainties"),
            ],
            figures: crate::figures::weak_localization(),
            ..Default::default()
        }
    }

    fn run(params: WeakLocalizationParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let grouping = TemperatureGroupingParams {
            temperature_tolerance_k: params
                .temperature_tolerance_k
                .unwrap_or(DEFAULT_TEMPERATURE_TOLERANCE_K),
            temperature_relative_tolerance: params
                .temperature_relative_tolerance
                .unwrap_or(DEFAULT_TEMPERATURE_RELATIVE_TOLERANCE),
        }
        .grouping();
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
        let mut settings = WeakLocalizationSettings::default();
        settings.max_field_t = params.max_field_t;
        if let Some(tolerance) = params.zero_field_tolerance_t {
            settings.zero_field_tolerance_t = tolerance;
        }
        settings.classical_term = params.classical_term;
        settings.fit_offset = params.fit_offset;
        host.check_cancelled()?;
        let fit = fit_weak_localization(&sweep, &settings).map_err(|e| invalid(e.to_string()))?;
        let curve = &fit.curve;
        let out = frame(
            curve.len(),
            vec![
                floats("field_T", curve.iter().map(|p| p.field_t).collect()),
                floats("delta_sigma_S", curve.iter().map(|p| p.delta_sigma_s).collect()),
                optional("delta_sigma_S_unc", curve.iter().map(|p| p.delta_sigma_unc_s).collect()),
                floats("model_S", curve.iter().map(|p| p.model_s).collect()),
                Column::new("fitted".into(), curve.iter().map(|p| p.fitted).collect::<Vec<bool>>()),
            ],
        )?;
        let mut output = AnalysisOutput::new(out);
        let summary = &mut output.summary;
        summary.extend(table.identity());
        summary.insert("phase_coherence_length_m".into(), json!(fit.phase_coherence_length_m));
        summary.insert(
            "phase_coherence_length_m_unc".into(),
            json!(fit.phase_coherence_length_unc_m),
        );
        summary.insert("phase_coherence_field_T".into(), json!(fit.phase_coherence_field_t));
        summary.insert("alpha".into(), json!(fit.alpha));
        summary.insert("alpha_unc".into(), json!(fit.alpha_unc));
        summary.insert("classical_S_per_T2".into(), json!(fit.classical_s_per_t2));
        summary.insert("zero_field_conductance_S".into(), json!(fit.zero_field_conductance_s));
        summary.insert("reduced_chi_square".into(), json!(fit.reduced_chi_square));
        // p-value and Birge ratio only mean something against stated errors.
        summary.insert(
            "chi_square_p_value".into(),
            json!(fit.quality.as_ref().map(|q| q.p_value)),
        );
        summary.insert("birge_ratio".into(), json!(fit.quality.as_ref().map(|q| q.birge_ratio)));
        summary.insert("fitted_points".into(), json!(fit.fitted_points));
        summary.insert("single_field_sign".into(), json!(fit.single_field_sign));
        output.warnings = table.warnings.clone();
        output.warnings.extend(fit.warnings.iter().cloned());
        Ok(output)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_physics::forward::oscillations::{OscillationComponent, SdhModel};
    use mobilis_sdk::sdk::run_typed;

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
                floats("field_T", field),
                floats("rho_xx_ohm_sq", rho_xx),
                floats("rho_xy_ohm", rho_xy),
                floats("temperature_K", temperature),
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
                floats("rho_xy_ohm", field.iter().map(|b| -50.0 * b).collect()),
                floats("field_T", field),
                floats("rho_xx_ohm_sq", rho_xx),
                floats("temperature_K", temperature),
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
                floats("field_T", field),
                floats("rho_xx_ohm_sq", rho_xx),
                floats("rho_xy_ohm", vec![0.0; rows]),
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

    #[test]
    fn mass_fit_temperatures_span_the_data() {
        let grid = mass_fit_temperatures(&[2.0, 8.0, 4.0]);
        assert_eq!(grid.len(), MASS_FIT_POINTS);
        assert!((grid[0] - 1.0).abs() < 1e-12 && (grid[MASS_FIT_POINTS - 1] - 8.8).abs() < 1e-12);
        assert!(mass_fit_temperatures(&[3.0, 3.0]).is_empty());
    }
}
