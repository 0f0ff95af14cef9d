//! The uncertainty budget of `mr.oscillations` ("Uncertainties" in the parent module's
//! documentation): the fit's own standard errors, the spread over other backgrounds and a
//! shorter window, and the stated field and thermometer calibrations.

use super::results::{OscillationAnalysis, OscillationBudget, UncertaintyBudget};
use super::settings::{Background, OscillationSettings};

/// The analysis spread and the per-sweep temperature stability both belong to the
/// statistical part; they enter it as one quadrature term.
fn spread_and_stability(spread: f64, stability: f64) -> f64 {
    spread.hypot(stability)
}

/// The part of the 1/B window a shorter-window variant keeps (from 1/B_max up): the lowest
/// fields, where the oscillation is weakest and the background least certain, are left out.
const SHORTER_WINDOW_FRACTION: f64 = 0.8;

/// The other analyses whose results bound the choices of background and window: for a
/// polynomial background the degrees d + 2 and d + 4 (up to 12), for a smoothing one the
/// half-widths 0.6 and 1.5 times the given, and the window without the lowest fifth of its
/// 1/B span (kept only when [`variant_applies`]: it needs the main pass's line). Each keeps
/// the settings otherwise, with the main pass's field `window`, without the fan and without
/// a spread of its own.
pub(super) fn variants(settings: &OscillationSettings, window: (f64, f64)) -> Vec<(String, OscillationSettings)> {
    let base = OscillationSettings {
        landau_fan: false,
        model_spread: false,
        temperature_accuracy_k: None,
        temperature_stability_k: None,
        field_min_t: Some(window.0),
        field_max_t: Some(window.1),
        ..settings.clone()
    };
    let mut result = Vec::new();
    match settings.background {
        Background::Polynomial { degree } => {
            for extra in [2, 4] {
                if degree + extra <= 12 {
                    result.push((
                        format!("background degree {}", degree + extra),
                        OscillationSettings {
                            background: Background::Polynomial { degree: degree + extra },
                            ..base.clone()
                        },
                    ));
                }
            }
        }
        Background::Smoothing { width_inverse_t } => {
            for factor in [0.6, 1.5] {
                result.push((
                    format!("smoothing half-width {:.4} 1/T", factor * width_inverse_t),
                    OscillationSettings {
                        background: Background::Smoothing {
                            width_inverse_t: factor * width_inverse_t,
                        },
                        ..base.clone()
                    },
                ));
            }
        }
    }
    let (x_low, x_high) = (1.0 / window.1, 1.0 / window.0);
    let shorter = x_low + SHORTER_WINDOW_FRACTION * (x_high - x_low);
    result.push((
        format!("the field window from {:.3} T", 1.0 / shorter),
        OscillationSettings {
            field_min_t: Some(1.0 / shorter),
            ..base
        },
    ));
    result
}

/// Whether a variant of [`variants`] counts for the main `analysis`: the shorter window only
/// when it holds at least `min_periods + 1` periods of the main line.
pub(super) fn variant_applies(
    settings: &OscillationSettings,
    variant: &OscillationSettings,
    analysis: &OscillationAnalysis,
) -> bool {
    if variant.field_min_t == Some(analysis.field_window_t.0) {
        return true;
    }
    let (x_low, x_high) = analysis.inverse_field_window_per_t;
    let shorter = x_low + SHORTER_WINDOW_FRACTION * (x_high - x_low);
    let periods = analysis.lines[0].frequency_t * (shorter - x_low);
    periods >= settings.min_periods + 1.0
}

/// The spread of a result over the variants beyond what their noise explains: for each
/// variant, the squared difference from the main result less |u_v^2 - u_0^2|, the variance
/// of the difference of two estimates from one data set when both are unbiased (the
/// estimate with fewer free choices is then nested in the other; after R. Barlow,
/// "Systematic errors: facts and fictions", 2002, from memory); the largest over the
/// variants, as a standard uncertainty.
fn spread(main: (f64, Option<f64>), others: &[(f64, Option<f64>)]) -> f64 {
    let own = main.1.unwrap_or(0.0);
    others
        .iter()
        .filter(|(value, _)| value.is_finite())
        .map(|(value, unc)| {
            let difference = value - main.0;
            let noise = (unc.unwrap_or(own).powi(2) - own * own).abs();
            (difference * difference - noise).max(0.0)
        })
        .fold(0.0f64, f64::max)
        .sqrt()
}

/// Fills `analysis.budget` from the variants' outcomes and the stated calibrations.
pub(super) fn assign(
    analysis: &mut OscillationAnalysis,
    outcomes: &[(String, OscillationAnalysis)],
    settings: &OscillationSettings,
) {
    let line = analysis.lines[0].clone();
    // A variant whose strongest line is another one says nothing about this one.
    let mut comparable = Vec::new();
    for (label, other) in outcomes {
        if (other.lines[0].frequency_t - line.frequency_t).abs() <= 1.5 * analysis.resolution_t {
            comparable.push((label.clone(), other));
        } else {
            analysis.warnings.push(format!(
                "with {label} the strongest line is at {:.4} T instead of {:.4} T; that check of the uncertainty was left out",
                other.lines[0].frequency_t, line.frequency_t
            ));
        }
    }
    let mut budget = OscillationBudget {
        variants: comparable.iter().map(|(label, _)| label.clone()).collect(),
        ..OscillationBudget::default()
    };
    // Not stated is assumed at the common-practice values every analysis assumes, and said.
    let field_relative = settings
        .field_calibration_rel
        .unwrap_or(mobilis_physics::calibration::DEFAULT_FIELD_CALIBRATION_REL);
    let temperature_accuracy = settings
        .temperature_accuracy_k
        .unwrap_or(mobilis_physics::calibration::DEFAULT_TEMPERATURE_ACCURACY_K);
    if settings.field_calibration_rel.is_none() {
        budget.calibrations_not_stated.push("field_calibration_rel");
    }
    if settings.temperature_accuracy_k.is_none() {
        budget.calibrations_not_stated.push("temperature_accuracy_K");
    }

    // F and n = g_s e F / h: a field scale error scales F (and n) by the same factor.
    let frequencies: Vec<(f64, Option<f64>)> = comparable
        .iter()
        .map(|(_, o)| (o.lines[0].frequency_t, o.lines[0].frequency_unc_t))
        .collect();
    let frequency_spread = spread((line.frequency_t, line.frequency_unc_t), &frequencies);
    budget.frequency = Some(UncertaintyBudget::new(
        line.frequency_unc_t,
        frequency_spread,
        field_relative * line.frequency_t,
    ));
    let per_frequency = line.sheet_density_m2 / line.frequency_t;
    budget.sheet_density = Some(UncertaintyBudget::new(
        line.sheet_density_unc_m2,
        frequency_spread * per_frequency,
        field_relative * line.sheet_density_m2,
    ));

    // m*: X = c m* T / B, so a field scale error scales m* by the same factor and a
    // thermometer error moves it by the sensitivity of the refit (or, without a waveform
    // fit, by m* u_T / T at the mean temperature).
    let mut mass_temperature_relative = 0.0;
    let mut mass_stability = 0.0;
    if let Some(mass) = analysis.mass.clone().filter(|m| m.method != "known") {
        let others: Vec<(f64, Option<f64>)> = comparable
            .iter()
            .filter_map(|(_, o)| o.mass.as_ref())
            .map(|m| (m.effective_mass_ratio, m.effective_mass_ratio_unc))
            .collect();
        let mass_spread = spread((mass.effective_mass_ratio, mass.effective_mass_ratio_unc), &others);
        let temperature_shift = match analysis.temperature_sensitivity {
            Some((per_kelvin, _)) => per_kelvin * temperature_accuracy,
            None => {
                let temperatures: Vec<f64> = analysis.curves.iter().map(|c| c.temperature_k).collect();
                let mean = temperatures.iter().sum::<f64>() / temperatures.len().max(1) as f64;
                mass.effective_mass_ratio * temperature_accuracy / mean
            }
        };
        mass_temperature_relative = (temperature_shift / mass.effective_mass_ratio).abs();
        mass_stability = analysis.temperature_stability_effect.map_or(0.0, |(m, _)| m);
        budget.effective_mass = Some(UncertaintyBudget::new(
            mass.effective_mass_ratio_unc,
            spread_and_stability(mass_spread, mass_stability),
            (field_relative * mass.effective_mass_ratio).hypot(temperature_shift),
        ));
    }
    // T_D: the Dingle slope fixes c m* T_D, which a field scale error leaves alone (m* and B
    // scale together) and a thermometer error moves as it moves 1 / m*.
    if let Some(plot) = &analysis.dingle {
        let others: Vec<(f64, Option<f64>)> = comparable
            .iter()
            .filter_map(|(_, o)| o.dingle.as_ref())
            .map(|d| (d.dingle_temperature_k, Some(d.dingle_temperature_unc_k)))
            .collect();
        let dingle_spread = spread(
            (plot.dingle_temperature_k, Some(plot.dingle_temperature_unc_k)),
            &others,
        );
        let relative_stability = analysis
            .mass
            .as_ref()
            .map_or(0.0, |m| mass_stability / m.effective_mass_ratio);
        budget.dingle_temperature = Some(UncertaintyBudget::new(
            Some(plot.dingle_temperature_unc_k),
            spread_and_stability(dingle_spread, plot.dingle_temperature_k * relative_stability),
            (plot.dingle_temperature_k * mass_temperature_relative).abs(),
        ));
    }
    if !budget.calibrations_not_stated.is_empty() {
        analysis.warnings.push(format!(
            "no calibration was stated for {}: the common-practice values were assumed ({} 0.5 % of the field, {} 0.02 K); state your magnet's and thermometer's calibrations to replace them",
            budget.calibrations_not_stated.join(" and "),
            mobilis_physics::calibration::FIELD_CALIBRATION,
            mobilis_physics::calibration::TEMPERATURE_ACCURACY
        ));
    }
    analysis.budget = budget;
}

#[cfg(test)]
mod tests {
    use super::*;

    // A variant that agrees with the main result within the noise of its difference adds
    // nothing; one that differs by more adds the excess (arithmetic of the definition).
    #[test]
    fn budget_spread_counts_only_the_excess_over_the_noise() {
        assert_eq!(spread((1.0, Some(0.1)), &[(1.05, Some(0.12))]), 0.0);
        let excess = spread((1.0, Some(0.1)), &[(1.5, Some(0.1)), (1.1, Some(0.1))]);
        assert!((excess - 0.5).abs() < 1e-12, "{excess}");
        let partly = spread((0.0, Some(0.3)), &[(0.5, Some(0.5))]);
        assert!((partly - (0.25f64 - 0.16).sqrt()).abs() < 1e-12, "{partly}");
        assert_eq!(spread((1.0, Some(0.1)), &[]), 0.0);
    }

    #[test]
    fn budget_totals_are_quadrature_sums() {
        let budget = UncertaintyBudget::new(Some(3.0), 4.0, 12.0);
        assert_eq!(budget.statistical, Some(5.0));
        assert_eq!(budget.total, Some(13.0));
        assert_eq!(UncertaintyBudget::new(None, 4.0, 1.0).total, None);
    }
}
