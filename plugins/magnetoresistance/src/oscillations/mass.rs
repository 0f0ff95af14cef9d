//! The effective mass from the thermal damping (narrow windows), the Dingle plot and the
//! Landau-level fan (steps 7 to 9 of the parent module's documentation).

use std::f64::consts::PI;

use mobilis_numerics::fit::{fit_line, Bounds, LeastSquares, LmOptions};
use mobilis_physics::forward::oscillations::{quantum_lifetime_s, thermal_damping, LK_FIELD_PER_KELVIN};

use super::error::OscillationError;
use super::prepare::Prepared;
use super::results::{
    DinglePlot, DinglePoint, Extremum, FanPoint, LandauFan, MassWindow, ThermalDampingFit, WindowAmplitude,
};
use super::waveform::{finite, in_phase_amplitude, linear_least_squares, wrap_phase, WindowEnvelope};
use mobilis_numerics::linalg::Matrix;

/// Temperatures closer than this fraction of the larger count as one.
pub const SAME_TEMPERATURE: f64 = 1e-3;

/// The distinct temperatures among `temperatures`, ascending.
pub(super) fn distinct_temperatures(temperatures: &[f64]) -> Vec<f64> {
    let mut sorted = temperatures.to_vec();
    sorted.sort_by(f64::total_cmp);
    let mut distinct: Vec<f64> = Vec::new();
    for t in sorted {
        match distinct.last() {
            Some(last) if (t - last).abs() <= SAME_TEMPERATURE * t.abs().max(last.abs()) => {}
            _ => distinct.push(t),
        }
    }
    distinct
}

/// ln R_T(X_hi) - ln R_T(X_lo) as a function of the mass, for the starting value.
fn log_ratio(mass: f64, t_low: f64, t_high: f64, inverse_field: f64) -> f64 {
    let x_low = LK_FIELD_PER_KELVIN * mass * t_low * inverse_field;
    let x_high = LK_FIELD_PER_KELVIN * mass * t_high * inverse_field;
    thermal_damping(x_high).ln() - thermal_damping(x_low).ln()
}

/// The mass that makes R_T(T_hi) / R_T(T_lo) equal the measured amplitude ratio (bisection
/// in ln m: the log ratio falls monotonically with m); 0.1 when the ratio is not in (0, 1).
fn starting_mass(temperatures: &[f64], amplitudes: &[f64], inverse_field: f64) -> f64 {
    let (mut low_index, mut high_index) = (0, 0);
    for i in 0..temperatures.len() {
        if temperatures[i] < temperatures[low_index] {
            low_index = i;
        }
        if temperatures[i] > temperatures[high_index] {
            high_index = i;
        }
    }
    let ratio = amplitudes[high_index] / amplitudes[low_index];
    if !(ratio > 0.0 && ratio < 1.0) {
        return 0.1;
    }
    let target = ratio.ln();
    let (t_low, t_high) = (temperatures[low_index], temperatures[high_index]);
    let (mut lo, mut hi) = (1e-4f64.ln(), 100f64.ln());
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if log_ratio(mid.exp(), t_low, t_high, inverse_field) > target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    (0.5 * (lo + hi)).exp()
}

/// Fits A(T) = A_0 R_T(2 pi^2 k_B T m* / (hbar e B_eff)) to oscillation amplitudes measured
/// at one effective field, by bounded Levenberg-Marquardt in (A_0, m*/m_0). With
/// `uncertainties` the residuals are weighted by them and the standard errors follow from
/// them alone (two temperatures then suffice); without, every amplitude has the same weight
/// and the scatter sets the errors (three points at least).
pub fn fit_thermal_damping(
    temperatures_k: &[f64],
    amplitudes_ohm_sq: &[f64],
    uncertainties_ohm_sq: Option<&[f64]>,
    effective_field_t: f64,
) -> Result<ThermalDampingFit, OscillationError> {
    let n = temperatures_k.len();
    let invalid = |name: &'static str, value: f64, requirement: &'static str| OscillationError::InvalidSetting {
        name,
        value,
        requirement,
    };
    if amplitudes_ohm_sq.len() != n || uncertainties_ohm_sq.is_some_and(|u| u.len() != n) {
        return Err(invalid(
            "amplitudes",
            amplitudes_ohm_sq.len() as f64,
            "give one amplitude (and uncertainty) per temperature",
        ));
    }
    if !(effective_field_t.is_finite() && effective_field_t > 0.0) {
        return Err(invalid(
            "effective_field_t",
            effective_field_t,
            "give a finite positive field",
        ));
    }
    for i in 0..n {
        if !(temperatures_k[i].is_finite() && temperatures_k[i] > 0.0) {
            return Err(invalid(
                "temperature_k",
                temperatures_k[i],
                "give finite positive temperatures",
            ));
        }
        if !amplitudes_ohm_sq[i].is_finite() {
            return Err(invalid("amplitude", amplitudes_ohm_sq[i], "give finite amplitudes"));
        }
        if let Some(u) = uncertainties_ohm_sq {
            if !(u[i].is_finite() && u[i] > 0.0) {
                return Err(invalid(
                    "amplitude uncertainty",
                    u[i],
                    "give finite positive uncertainties",
                ));
            }
        }
    }
    let distinct = distinct_temperatures(temperatures_k);
    if distinct.len() < 2 {
        return Err(OscillationError::SingleTemperature {
            temperature_k: temperatures_k.first().copied().unwrap_or(f64::NAN),
            sweeps: n,
        });
    }
    let inverse_field = 1.0 / effective_field_t;
    let mass_start = starting_mass(temperatures_k, amplitudes_ohm_sq, inverse_field);
    let coldest = (0..n)
        .min_by(|a, b| temperatures_k[*a].total_cmp(&temperatures_k[*b]))
        .unwrap_or(0);
    let x_cold = LK_FIELD_PER_KELVIN * mass_start * temperatures_k[coldest] * inverse_field;
    let prefactor_start = (amplitudes_ohm_sq[coldest] / thermal_damping(x_cold))
        .abs()
        .max(f64::MIN_POSITIVE);
    let weights: Vec<f64> = match uncertainties_ohm_sq {
        Some(u) => u.iter().map(|s| 1.0 / s).collect(),
        None => vec![1.0; n],
    };
    let residuals = |p: &[f64], r: &mut [f64]| {
        for i in 0..n {
            let x = LK_FIELD_PER_KELVIN * p[1] * temperatures_k[i] * inverse_field;
            r[i] = (p[0] * thermal_damping(x) - amplitudes_ohm_sq[i]) * weights[i];
        }
    };
    let options = LmOptions {
        residuals_are_weighted: uncertainties_ohm_sq.is_some(),
        ..LmOptions::default()
    };
    let bounds = Bounds::new(vec![0.0, 1e-4], vec![f64::INFINITY, 100.0]).map_err(|error| OscillationError::Fit {
        what: "thermal-damping fit",
        error,
    })?;
    let fit = LeastSquares::new(n, residuals)
        .with_bounds(bounds)
        .minimize(&[prefactor_start, mass_start], &options)
        .map_err(|error| OscillationError::Fit {
            what: "thermal-damping fit",
            error,
        })?;
    Ok(ThermalDampingFit {
        effective_mass_ratio: fit.parameters[1],
        effective_mass_ratio_unc: finite(fit.standard_errors[1]),
        prefactor_ohm_sq: fit.parameters[0],
        effective_field_t,
        chi_square: fit.chi_square,
        points: n,
        converged: fit.converged,
    })
}

/// The damping assumed across a window when its amplitude is referred to its mean 1/B.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct DampingHint {
    pub mass: f64,
    pub dingle_k: f64,
}

/// A [`DampingHint`] at one sweep's temperature: the envelope R_T(c m* T x) R_D(x) across a
/// window, relative to its value at the window's reference 1/B.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct SweepDamping {
    pub hint: DampingHint,
    pub temperature_k: f64,
}

impl WindowEnvelope for SweepDamping {
    fn relative_to(&self, reference: f64, x: &[f64], shape: &mut [f64]) {
        let scale = LK_FIELD_PER_KELVIN * self.hint.mass;
        // R_T at the reference 1/B, the same for every point of the window.
        let at_reference = thermal_damping(scale * self.temperature_k * reference);
        for (value, xi) in shape.iter_mut().zip(x) {
            let thermal = thermal_damping(scale * self.temperature_k * xi) / at_reference;
            *value = thermal * (-scale * self.hint.dingle_k * (xi - reference)).exp();
        }
    }
}

/// Iterations of the narrow-window mass with the damping across each window taken from the
/// previous estimate.
const NARROW_WINDOW_ITERATIONS: usize = 6;

/// The windows' masses combined: the mass ratio m*/m_0, its uncertainty and the Birge ratio
/// of the combination, when there is one.
pub(super) type CombinedMass = (f64, Option<f64>, Option<f64>);

/// The narrow-window mass (step 7 of the parent module's documentation): a first pass with
/// constant envelopes, then passes whose window amplitudes are referred to each window's
/// mean 1/B with the damping of the previous mass (and the Dingle temperature given), until
/// the mass changes by less than 1e-5 of itself.
pub(super) fn narrow_window_mass(
    prepared: &[Prepared],
    reference: usize,
    frequency: f64,
    range: (f64, f64),
    windows: usize,
    dingle_k: f64,
    warnings: &mut Vec<String>,
) -> (Vec<MassWindow>, Option<CombinedMass>) {
    let mut scratch = Vec::new();
    let mut current = narrow_windows(prepared, reference, frequency, range, windows, None, &mut scratch);
    let mut combined = combine_windows(&current);
    for _ in 0..NARROW_WINDOW_ITERATIONS {
        let Some((mass, ..)) = combined else { break };
        scratch.clear();
        let hint = DampingHint {
            mass: mass.clamp(1e-3, 20.0),
            dingle_k: dingle_k.max(0.0),
        };
        let next = narrow_windows(prepared, reference, frequency, range, windows, Some(hint), &mut scratch);
        let next_combined = combine_windows(&next);
        let converged = next_combined.is_some_and(|(m, ..)| (m - mass).abs() <= 1e-5 * mass);
        current = next;
        combined = next_combined;
        if converged {
            break;
        }
    }
    warnings.append(&mut scratch);
    (current, combined)
}

/// The narrow-window amplitudes and per-window masses: per window of 1/B, in-phase
/// amplitudes of every sweep (the phase fixed by the reference sweep), R_T fitted at the
/// window's own field.
pub(super) fn narrow_windows(
    prepared: &[Prepared],
    reference: usize,
    frequency: f64,
    range: (f64, f64),
    windows: usize,
    hint: Option<DampingHint>,
    warnings: &mut Vec<String>,
) -> Vec<MassWindow> {
    let width = (range.1 - range.0) / windows as f64;
    let reference_sweep = &prepared[reference];
    let mut result = Vec::new();
    let mut faint = 0;
    for j in 0..windows {
        let bounds = (range.0 + j as f64 * width, range.0 + (j + 1) as f64 * width);
        let reference_envelope = hint.map(|hint| SweepDamping {
            hint,
            temperature_k: reference_sweep.temperature_k,
        });
        let Some(probe) = in_phase_amplitude(
            &reference_sweep.inverse_field,
            &reference_sweep.oscillation,
            bounds,
            frequency,
            0.0,
            reference_envelope.as_ref().map(|g| g as &dyn WindowEnvelope),
            None,
        ) else {
            warnings.push(format!(
                "mass window {j} (1/B in [{:.4}, {:.4}] 1/T) has too few points in the reference sweep and was skipped",
                bounds.0, bounds.1
            ));
            continue;
        };
        // A window where even the coldest sweep shows no oscillation above three standard
        // errors has no thermal damping to measure.
        if probe.amplitude.hypot(probe.quadrature) <= 3.0 * probe.amplitude_unc {
            faint += 1;
            continue;
        }
        let phase = -probe.phase_correction();
        let mut amplitudes = Vec::with_capacity(prepared.len());
        let mut complete = true;
        for sweep in prepared {
            let envelope = hint.map(|hint| SweepDamping {
                hint,
                temperature_k: sweep.temperature_k,
            });
            match in_phase_amplitude(
                &sweep.inverse_field,
                &sweep.oscillation,
                bounds,
                frequency,
                phase,
                envelope.as_ref().map(|g| g as &dyn WindowEnvelope),
                // Every sweep's amplitude refers to the reference sweep's mean 1/B, the
                // field the window's R_T(T) is fitted at.
                Some(probe.mean_inverse_field),
            ) {
                Some(window) => amplitudes.push(WindowAmplitude {
                    temperature_k: sweep.temperature_k,
                    amplitude_ohm_sq: window.amplitude,
                    amplitude_unc_ohm_sq: window.amplitude_unc,
                }),
                None => complete = false,
            }
        }
        if !complete {
            warnings.push(format!(
                "mass window {j} (1/B in [{:.4}, {:.4}] 1/T) has too few points in some sweep and was skipped",
                bounds.0, bounds.1
            ));
            continue;
        }
        let effective_field_t = 1.0 / probe.mean_inverse_field;
        let temperatures: Vec<f64> = amplitudes.iter().map(|a| a.temperature_k).collect();
        let values: Vec<f64> = amplitudes.iter().map(|a| a.amplitude_ohm_sq).collect();
        let sigmas: Vec<f64> = amplitudes
            .iter()
            .map(|a| {
                a.amplitude_unc_ohm_sq
                    .max(1e-12 * a.amplitude_ohm_sq.abs())
                    .max(f64::MIN_POSITIVE)
            })
            .collect();
        let fit = fit_thermal_damping(&temperatures, &values, Some(&sigmas), effective_field_t);
        match fit {
            Ok(fit) => result.push(MassWindow {
                inverse_field_range_per_t: bounds,
                effective_field_t,
                amplitudes,
                fit: Some(fit),
            }),
            Err(error) => {
                warnings.push(format!(
                    "the thermal-damping fit of mass window {j} (B_eff = {effective_field_t:.3} T) failed and the window is left out: {error}"
                ));
                result.push(MassWindow {
                    inverse_field_range_per_t: bounds,
                    effective_field_t,
                    amplitudes,
                    fit: None,
                });
            }
        }
    }
    if faint > 0 {
        warnings.push(format!(
            "{faint} of {windows} mass windows were left out: the reference sweep's oscillation there is not above three standard errors"
        ));
    }
    result
}

/// Inverse-variance mean of the windows' masses; its standard error is scaled up by the
/// Birge ratio sqrt(chi^2 / (K - 1)) when the windows scatter more than their errors allow.
/// Returns (mass, uncertainty, Birge ratio).
pub(super) fn combine_windows(windows: &[MassWindow]) -> Option<CombinedMass> {
    let fits: Vec<(f64, Option<f64>)> = windows
        .iter()
        .filter_map(|w| w.fit.as_ref())
        .map(|f| (f.effective_mass_ratio, f.effective_mass_ratio_unc.filter(|u| *u > 0.0)))
        .collect();
    if fits.is_empty() {
        return None;
    }
    // Windows without a standard error (a mass held at its bound) carry no weight.
    let weighted: Vec<(f64, f64)> = fits.iter().filter_map(|(m, u)| u.map(|u| (*m, u))).collect();
    if weighted.is_empty() {
        // No window has an error: the plain mean and the scatter.
        let mean = fits.iter().map(|f| f.0).sum::<f64>() / fits.len() as f64;
        let unc = (fits.len() >= 2).then(|| {
            let variance = fits.iter().map(|f| (f.0 - mean).powi(2)).sum::<f64>() / (fits.len() - 1) as f64;
            (variance / fits.len() as f64).sqrt()
        });
        return Some((mean, unc, None));
    }
    let weights: Vec<f64> = weighted.iter().map(|f| 1.0 / (f.1 * f.1)).collect();
    let total: f64 = weights.iter().sum();
    let mean = weighted.iter().zip(&weights).map(|(f, w)| f.0 * w).sum::<f64>() / total;
    let internal = total.sqrt().recip();
    if weighted.len() < 2 {
        return Some((mean, Some(internal), None));
    }
    let chi_square: f64 = weighted
        .iter()
        .zip(&weights)
        .map(|(f, w)| w * (f.0 - mean).powi(2))
        .sum();
    let birge = (chi_square / (weighted.len() - 1) as f64).sqrt();
    Some((mean, Some(internal * birge.max(1.0)), Some(birge)))
}

/// The Dingle plot of one sweep: in-phase amplitudes in consecutive windows of
/// `periods` periods, ln(A sinh X / X) against 1/B, slope -c m* T_D.
#[allow(clippy::too_many_arguments)]
pub(super) fn dingle_plot(
    sweep: &Prepared,
    frequency: f64,
    phase: f64,
    range: (f64, f64),
    periods: f64,
    mass: f64,
    mass_unc: Option<f64>,
    dingle_hint_k: f64,
) -> Result<DinglePlot, String> {
    // The windows' amplitudes are referred to their mean 1/B with the damping of the
    // previous estimate of T_D; a few rounds settle it.
    let mut hint = dingle_hint_k.max(0.0);
    let mut plot = dingle_plot_once(sweep, frequency, phase, range, periods, mass, mass_unc, hint)?;
    for _ in 0..DINGLE_ITERATIONS {
        let next_hint = plot.dingle_temperature_k.max(0.0);
        if (next_hint - hint).abs() <= 1e-4 * next_hint.max(1e-3) {
            break;
        }
        hint = next_hint;
        plot = dingle_plot_once(sweep, frequency, phase, range, periods, mass, mass_unc, hint)?;
    }
    Ok(plot)
}

/// Standard errors by which a Dingle window's amplitude must exceed zero.
const DINGLE_WINDOW_SIGNIFICANCE: f64 = 3.0;

/// Rounds of the Dingle plot with the envelope of the previous T_D.
const DINGLE_ITERATIONS: usize = 5;

#[allow(clippy::too_many_arguments)]
#[allow(
    clippy::neg_cmp_op_on_partial_ord,
    reason = "`!(x > y)` refuses NaN too, in one test"
)]
fn dingle_plot_once(
    sweep: &Prepared,
    frequency: f64,
    phase: f64,
    range: (f64, f64),
    periods: f64,
    mass: f64,
    mass_unc: Option<f64>,
    dingle_hint_k: f64,
) -> Result<DinglePlot, String> {
    let hint = DampingHint {
        mass,
        dingle_k: dingle_hint_k,
    };
    let envelope = SweepDamping {
        hint,
        temperature_k: sweep.temperature_k,
    };
    let width = periods / frequency;
    let count = ((range.1 - range.0) / width).floor() as usize;
    let mut points = Vec::new();
    let mut dropped = 0;
    for j in 0..count {
        let bounds = (range.0 + j as f64 * width, range.0 + (j + 1) as f64 * width);
        // The plot runs from the strongest field down to where the oscillation sinks into
        // the noise: once a window has failed after usable ones, every later (weaker) window
        // is left out too. A window that passed there by a chance excursion of the noise
        // would sit far above the line (ln A of noise is biased up by the selection) and
        // dominate the fit.
        if !points.is_empty() && dropped > 0 {
            dropped += 1;
            continue;
        }
        let Some(window) = in_phase_amplitude(
            &sweep.inverse_field,
            &sweep.oscillation,
            bounds,
            frequency,
            phase,
            Some(&envelope),
            None,
        ) else {
            dropped += 1;
            continue;
        };
        // A window whose amplitude is not above three standard errors (the rule of the mass
        // windows) has no logarithm worth plotting (and a negative one none at all).
        if !(window.amplitude > DINGLE_WINDOW_SIGNIFICANCE * window.amplitude_unc) {
            dropped += 1;
            continue;
        }
        points.push(DinglePoint {
            inverse_field_per_t: window.mean_inverse_field,
            amplitude_ohm_sq: window.amplitude,
            amplitude_unc_ohm_sq: window.amplitude_unc,
            ordinate: 0.0,
            ordinate_unc: window.amplitude_unc / window.amplitude,
        });
    }
    if points.len() < 3 {
        return Err(format!(
            "the Dingle plot has {} usable windows of {periods} periods ({dropped} left out: no amplitude above three times its error, or weaker than such a window); it needs 3: widen the field window or use shorter windows",
            points.len()
        ));
    }
    let line_at = |m: f64, points: &mut [DinglePoint]| -> Result<(f64, f64, f64, f64), String> {
        for point in points.iter_mut() {
            let x = LK_FIELD_PER_KELVIN * m * sweep.temperature_k * point.inverse_field_per_t;
            point.ordinate = point.amplitude_ohm_sq.ln() - thermal_damping(x).ln();
        }
        let xs: Vec<f64> = points.iter().map(|p| p.inverse_field_per_t).collect();
        let ys: Vec<f64> = points.iter().map(|p| p.ordinate).collect();
        let sigmas: Vec<f64> = points.iter().map(|p| p.ordinate_unc).collect();
        let line = fit_line(&xs, &ys, Some(&sigmas)).map_err(|e| format!("the Dingle line fit failed: {e}"))?;
        // Scatter beyond the errors (chi^2 / nu > 1) scales the slope's error up.
        let inflation = if line.degrees_of_freedom > 0 {
            line.reduced_chi_square.max(1.0).sqrt()
        } else {
            1.0
        };
        Ok((
            line.slope,
            line.slope_unc * inflation,
            line.intercept,
            line.reduced_chi_square,
        ))
    };
    let (slope, slope_unc, intercept, reduced_chi_square) = line_at(mass, &mut points)?;
    let dingle = -slope / (LK_FIELD_PER_KELVIN * mass);
    let mut variance = (slope_unc / (LK_FIELD_PER_KELVIN * mass)).powi(2);
    if let Some(unc) = mass_unc.filter(|u| *u > 0.0 && *u < mass) {
        // The mass enters through c m* in the slope and through R_T in the ordinates: its
        // share of the error is half the change of T_D between m* - u and m* + u.
        let mut scratch = points.clone();
        let (slope_up, ..) = line_at(mass + unc, &mut scratch)?;
        let (slope_down, ..) = line_at(mass - unc, &mut scratch)?;
        let up = -slope_up / (LK_FIELD_PER_KELVIN * (mass + unc));
        let down = -slope_down / (LK_FIELD_PER_KELVIN * (mass - unc));
        variance += (0.5 * (up - down)).powi(2);
    }
    let dingle_unc = variance.sqrt();
    let lifetime = quantum_lifetime_s(dingle);
    Ok(DinglePlot {
        temperature_k: sweep.temperature_k,
        effective_mass_ratio: mass,
        window_periods: periods,
        points,
        slope_t: slope,
        slope_unc_t: slope_unc,
        intercept,
        reduced_chi_square,
        dingle_temperature_k: dingle,
        dingle_temperature_unc_k: dingle_unc,
        quantum_lifetime_s: lifetime,
        quantum_lifetime_unc_s: (lifetime * dingle_unc / dingle).abs(),
        dropped_windows: dropped,
    })
}

/// The Landau-level fan of one sweep: the extrema of the oscillation located by local
/// parabolas near where the fitted waveform puts them, indexed (minima integer, maxima
/// half-integer), and the line index = F_fan / B + beta through them.
pub(super) fn landau_fan(sweep: &Prepared, frequency: f64, phase: f64) -> Result<LandauFan, String> {
    let x = &sweep.inverse_field;
    let y = &sweep.oscillation;
    let (x_first, x_last) = (x[0], *x.last().unwrap_or(&x[0]));
    let quarter = 0.25 / frequency;
    // The extrema of cos(2 pi F x + phi) lie where 2 pi F x + phi = h pi: minima at odd h,
    // maxima at even h.
    let beta_model = wrap_half(phase / (2.0 * PI) - 0.5);
    let first_h = ((2.0 * PI * frequency * (x_first + quarter) + phase) / PI).ceil() as i64;
    let last_h = ((2.0 * PI * frequency * (x_last - quarter) + phase) / PI).floor() as i64;
    let mut points = Vec::new();
    for half_turns in first_h..=last_h {
        let predicted = (half_turns as f64 * PI - phase) / (2.0 * PI * frequency);
        let kind = if half_turns.rem_euclid(2) == 1 {
            Extremum::Minimum
        } else {
            Extremum::Maximum
        };
        // x ascending: the points within a quarter period are one run, found by bisection.
        let first = x.partition_point(|v| *v < predicted - quarter);
        let end = x.partition_point(|v| *v <= predicted + quarter);
        let selected: Vec<usize> = (first..end.max(first)).collect();
        if selected.len() < 5 {
            continue;
        }
        let design = Matrix::from_fn(selected.len(), 3, |row, col| {
            let d = (x[selected[row]] - predicted) / quarter;
            d.powi(col as i32)
        });
        let values: Vec<f64> = selected.iter().map(|&i| y[i]).collect();
        let Some(fit) = linear_least_squares(&design, &values) else {
            continue;
        };
        let (b, c) = (fit.coefficients[1], fit.coefficients[2]);
        let right_curvature = match kind {
            Extremum::Minimum => c > 0.0,
            Extremum::Maximum => c < 0.0,
        };
        if !right_curvature {
            continue;
        }
        let offset = -b / (2.0 * c);
        if offset.abs() >= 1.0 {
            continue;
        }
        let position = predicted + offset * quarter;
        let index = match kind {
            Extremum::Minimum => (frequency * position + beta_model).round(),
            Extremum::Maximum => (frequency * position + beta_model - 0.5).round() + 0.5,
        };
        points.push(FanPoint {
            inverse_field_per_t: position,
            index,
            kind,
        });
    }
    if points.len() < 3 {
        return Err(format!(
            "the Landau fan found {} extrema; it needs 3: widen the field window or reduce the noise",
            points.len()
        ));
    }
    let xs: Vec<f64> = points.iter().map(|p| p.inverse_field_per_t).collect();
    let ys: Vec<f64> = points.iter().map(|p| p.index).collect();
    let line = fit_line(&xs, &ys, None).map_err(|e| format!("the Landau fan line fit failed: {e}"))?;
    Ok(LandauFan {
        temperature_k: sweep.temperature_k,
        points,
        frequency_t: line.slope,
        frequency_unc_t: line.slope_unc,
        intercept: line.intercept,
        intercept_unc: line.intercept_unc,
        phase_rad: wrap_phase(2.0 * PI * (line.intercept + 0.5)),
    })
}

/// Wraps a fan intercept into (-1/2, 1/2].
fn wrap_half(value: f64) -> f64 {
    let wrapped = value.rem_euclid(1.0);
    if wrapped > 0.5 {
        wrapped - 1.0
    } else {
        wrapped
    }
}
