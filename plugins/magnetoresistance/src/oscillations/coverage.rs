//! Coverage of the Shubnikov-de Haas uncertainties: many realizations of realistic sweep
//! sets from known F, m* and T_D, and how often the truth lies within the reported 1 and 2
//! standard uncertainties (the project's rule: 55 % to 80 % and at least 90 %; expected
//! 68.3 % and 95.4 % for a normal distribution, JCGM 100:2008 G.1).
//!
//! Each realization is what a lab records, with every imperfection drawn afresh: a
//! saturating two-band magnetoresistance that no low polynomial follows, slightly different
//! at each temperature; four temperatures, each sweep sampled differently (equal steps in B
//! or in 1/B, different point counts); Gaussian noise on rho_xx; a thermometer offset common
//! to the series and a field calibration error, each drawn once per realization and stated
//! to the analysis as its standard uncertainty (`temperature_accuracy_k`,
//! `field_calibration_rel`).

use super::*;
use mobilis_numerics::fit::Coverage;
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::oscillations::{OscillationComponent, SdhModel};

/// The invented truth: a 2D gas of F = 60 T, m* = 0.2 m_0, T_D = 1.5 K, Delta rho / rho_0
/// prefactor 0.2 (test inputs, not measured values).
const FREQUENCY_T: f64 = 60.0;
const MASS_RATIO: f64 = 0.2;
const DINGLE_K: f64 = 1.5;
/// Stated calibrations: the thermometer to 10 mK, the field to 5e-4 of itself.
const THERMOMETER_UNC_K: f64 = 0.01;
const FIELD_RELATIVE_UNC: f64 = 5e-4;
/// rho_xx noise, ohm per square (the oscillation is 20 ohm per square before damping).
const NOISE_OHM_SQ: f64 = 0.05;

/// Realizations: 40 by default (about a minute in a debug build: each analysis runs four
/// times for its budget), 200 with `MOBILIS_SLOW_TESTS=1`.
fn realizations() -> usize {
    if std::env::var("MOBILIS_SLOW_TESTS").is_ok_and(|v| v == "1") {
        200
    } else {
        40
    }
}

/// One sweep set: the sweeps as recorded (nominal temperatures, fields as the magnet's
/// calibration reads them).
fn realization(rng: &mut Rng) -> Vec<OscillationSweep> {
    let model = SdhModel {
        background_ohm_sq: vec![100.0],
        components: vec![OscillationComponent {
            amplitude: 0.2,
            ..OscillationComponent::two_dimensional(FREQUENCY_T, MASS_RATIO, DINGLE_K)
        }],
    };
    // X = c m* T / B of 0.3, 1, 2 and 3.5 at 9 T: the thermal damping spans its range.
    let nominal: Vec<f64> = [0.3, 1.0, 2.0, 3.5]
        .iter()
        .map(|x| x * 9.0 / (LK_FIELD_PER_KELVIN * MASS_RATIO))
        .collect();
    let thermometer_offset = THERMOMETER_UNC_K * rng.standard_normal();
    let field_scale = 1.0 + FIELD_RELATIVE_UNC * rng.standard_normal();
    let saturation = rng.uniform_between(0.3, 1.0);
    let strength = rng.uniform_between(0.05, 0.3);
    nominal
        .iter()
        .enumerate()
        .map(|(k, &temperature)| {
            let points = 300 + 100 * k + (rng.uniform() * 100.0) as usize;
            let equal_in_inverse_field = k % 2 == 1;
            let recorded: Vec<f64> = (0..points)
                .map(|i| {
                    let s = i as f64 / (points - 1) as f64;
                    if equal_in_inverse_field {
                        1.0 / (1.0 / 1.2 + s * (1.0 / 9.0 - 1.0 / 1.2))
                    } else {
                        1.2 + s * (9.0 - 1.2)
                    }
                })
                .collect();
            let actual_temperature = temperature + thermometer_offset;
            // The background changes a little with temperature, as a real one does.
            let strength_here = strength * (1.0 + 0.02 * k as f64);
            let rho = recorded
                .iter()
                .map(|&reading| {
                    let b = reading * field_scale;
                    let background = 100.0 * (1.0 + strength_here * b * b / (1.0 + saturation * b * b));
                    background
                        + model.oscillatory_part_ohm_sq(b, actual_temperature)
                        + NOISE_OHM_SQ * rng.standard_normal()
                })
                .collect();
            OscillationSweep {
                temperature_k: temperature,
                field_t: recorded,
                rho_xx_ohm_sq: rho,
            }
        })
        .collect()
}

// The reported F, m* and T_D cover the truth as often as honest error bars do (JCGM
// 100:2008; coverage counted as in the module documentation).
#[test]
fn oscillations_uncertainties_cover_the_truth() {
    let settings = OscillationSettings {
        field_min_t: Some(1.5),
        field_calibration_rel: Some(FIELD_RELATIVE_UNC),
        temperature_accuracy_k: Some(THERMOMETER_UNC_K),
        ..OscillationSettings::default()
    };
    let mut rng = Rng::seeded(0x5DA5_C0E5);
    let (mut frequency, mut mass, mut dingle) = (Coverage::default(), Coverage::default(), Coverage::default());
    for _ in 0..realizations() {
        let analysis = analyze_oscillations(&realization(&mut rng), &settings).unwrap();
        let summary = analysis.summary();
        frequency.record(
            summary.frequency_t,
            summary.frequency_unc_t.unwrap_or(f64::NAN),
            FREQUENCY_T,
        );
        mass.record(
            summary.effective_mass_ratio.unwrap_or(f64::NAN),
            summary.effective_mass_ratio_unc.unwrap_or(f64::NAN),
            MASS_RATIO,
        );
        dingle.record(
            summary.dingle_temperature_k.unwrap_or(f64::NAN),
            summary.dingle_temperature_unc_k.unwrap_or(f64::NAN),
            DINGLE_K,
        );
    }
    eprintln!(
        "coverage F: {}\ncoverage m*: {}\ncoverage T_D: {}",
        frequency.describe(),
        mass.describe(),
        dingle.describe()
    );
    assert!(frequency.is_honest(), "F: {}", frequency.describe());
    assert!(mass.is_honest(), "m*: {}", mass.describe());
    assert!(dingle.is_honest(), "T_D: {}", dingle.describe());
}

// Without the budget (the fit's own errors only) the same realizations are not covered:
// the check above can fail, and the budget is what makes it pass.
#[test]
fn oscillations_fit_errors_alone_undercover_the_frequency() {
    let settings = OscillationSettings {
        field_min_t: Some(1.5),
        model_spread: false,
        ..OscillationSettings::default()
    };
    let mut rng = Rng::seeded(0x5DA5_C0E5);
    let mut frequency = Coverage::default();
    for _ in 0..20 {
        let analysis = analyze_oscillations(&realization(&mut rng), &settings).unwrap();
        let line = &analysis.lines[0];
        frequency.record(line.frequency_t, line.frequency_unc_t.unwrap_or(f64::NAN), FREQUENCY_T);
    }
    eprintln!("fit errors alone, F: {}", frequency.describe());
    assert!(!frequency.is_honest(), "F: {}", frequency.describe());
}
