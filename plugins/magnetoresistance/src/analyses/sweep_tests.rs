//! Real sweeps through the table glue of every magnetoresistance analysis: one field sign
//! (positive or negative only, flagged `single_field_sign`), densely logged ramps of 40,000
//! readings, and temperature series whose setpoints lie close together (the demo's 2 K and
//! 3 K, a sub-kelvin series).

use super::classical::{KohlerAnalysis, RatioAnalysis, SymmetrizeAnalysis, TwoBandAnalysis};
use super::quantum::{OscillationsAnalysis, WeakLocalizationAnalysis};
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::oscillations::{
    synthetic_weak_localization_sweep, OscillationComponent, SdhModel, WeakLocalizationModel,
};
use mobilis_physics::forward::tensor::{resistivity_tensor, Carrier, SweepNoise};
use mobilis_sdk::sdk::AnalysisError;
use mobilis_sdk::sdk::{run_typed, AnalysisOutput, Host, Inputs};
use polars::prelude::*;
use serde_json::json;

fn floats(name: &str, values: Vec<f64>) -> Column {
    Column::new(PlSmallStr::from_str(name), values)
}

fn frame(height: usize, columns: Vec<Column>) -> Result<DataFrame, AnalysisError> {
    DataFrame::new(height, columns).map_err(|e| AnalysisError::Numerical(e.to_string()))
}

/// A `sweep` table: (temperature, field, rho_xx, rho_xy) rows.
fn inputs(rows: &[(f64, f64, f64, f64)]) -> Inputs {
    let frame = frame(
        rows.len(),
        vec![
            floats("temperature_K", rows.iter().map(|r| r.0).collect()),
            floats("field_T", rows.iter().map(|r| r.1).collect()),
            floats("rho_xx_ohm_sq", rows.iter().map(|r| r.2).collect()),
            floats("rho_xy_ohm", rows.iter().map(|r| r.3).collect()),
        ],
    )
    .unwrap();
    Inputs::from_tables([("sweep".to_string(), frame)])
}

/// `count` fields from 0 to `max` T, times `sign`: a ramp logged at a fixed rate.
fn ramp(max_t: f64, count: usize, sign: f64) -> Vec<f64> {
    (0..count)
        .map(|k| sign * max_t * k as f64 / (count - 1) as f64)
        .collect()
}

fn run<A: mobilis_sdk::sdk::Analysis>(params: serde_json::Value, rows: &[(f64, f64, f64, f64)]) -> AnalysisOutput {
    run_typed::<A>(&params.to_string(), &inputs(rows), &Host::detached()).unwrap_or_else(|e| panic!("{}: {e}", A::NAME))
}

fn flagged(output: &AnalysisOutput) -> bool {
    output.warnings.iter().any(|w| w.contains("single_field_sign"))
}

/// The classical two-carrier sweep at `temperature` over `fields`.
fn classical_rows(temperature: f64, fields: &[f64]) -> Vec<(f64, f64, f64, f64)> {
    let carriers = [Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)];
    fields
        .iter()
        .map(|&b| {
            let rho = resistivity_tensor(&carriers, b).unwrap();
            (temperature, b, rho.rho_xx_ohm_sq, rho.rho_xy_ohm)
        })
        .collect()
}

// mr.ratio and mr.two_band_fit on one field sign of either sign: flagged, and the same MR as
// from both signs; mr.symmetrize refuses it, naming the missing sign.
#[test]
fn classical_analyses_take_one_field_sign_with_the_flag() {
    let both = run::<RatioAnalysis>(
        json!({}),
        &classical_rows(
            10.0,
            &mobilis_physics::forward::tensor::symmetric_fields(6.0, 30).unwrap(),
        ),
    );
    assert_eq!(both.summary["single_field_sign"], json!(false));
    assert!(!flagged(&both));
    let expected = both.summary["magnetoresistance_at_max_field"].as_f64().unwrap();
    for sign in [1.0, -1.0] {
        let rows = classical_rows(10.0, &ramp(6.0, 31, sign));
        let ratio = run::<RatioAnalysis>(json!({}), &rows);
        assert_eq!(ratio.summary["single_field_sign"], json!(true));
        assert!(flagged(&ratio), "{:?}", ratio.warnings);
        let mr = ratio.summary["magnetoresistance_at_max_field"].as_f64().unwrap();
        assert!(
            (mr - expected).abs() < 1e-12 * expected.abs().max(1.0),
            "{mr} vs {expected}"
        );
        let two_band = run::<TwoBandAnalysis>(json!({}), &rows);
        assert_eq!(two_band.summary["single_field_sign"], json!(true));
        assert!(
            two_band.warnings.iter().any(|w| w.contains("misalignment")),
            "{:?}",
            two_band.warnings
        );
        let error = run_typed::<SymmetrizeAnalysis>("{}", &inputs(&rows), &Host::detached()).unwrap_err();
        let message = error.to_string();
        let missing = if sign > 0.0 {
            "measure the negative branch"
        } else {
            "measure the positive branch"
        };
        assert!(message.contains(missing), "{message}");
    }
}

// mr.kohler on one-sign sweeps at the demo's temperatures: 2 K and 3 K stay two curves, and
// a sub-kelvin series in 0.1 K steps keeps every temperature.
#[test]
fn kohler_keeps_close_setpoints_apart_and_takes_one_field_sign() {
    for temperatures in [
        vec![2.0, 3.0, 4.5, 6.0, 8.0, 10.0],
        (3..=15).map(|k| 0.1 * k as f64).collect(),
    ] {
        let rows: Vec<_> = temperatures
            .iter()
            .flat_map(|&t| classical_rows(t, &ramp(6.0, 41, 1.0)))
            .collect();
        let kohler = run::<KohlerAnalysis>(json!({}), &rows);
        let found: Vec<f64> = serde_json::from_value(kohler.summary["temperatures_K"].clone()).unwrap();
        assert_eq!(found.len(), temperatures.len(), "{found:?}");
        for (a, b) in found.iter().zip(&temperatures) {
            assert!((a - b).abs() < 1e-12);
        }
        assert_eq!(kohler.summary["single_field_sign"], json!(true));
        // One warning for the series, not one per sweep.
        let flags = kohler
            .warnings
            .iter()
            .filter(|w| w.contains("single_field_sign"))
            .count();
        assert_eq!(flags, 1, "{:?}", kohler.warnings);
        // One carrier pair at every temperature: the curves collapse exactly.
        assert_eq!(kohler.summary["kohler_holds"], json!(true), "{:?}", kohler.warnings);
    }
}

/// Shubnikov-de Haas rows of a 2D gas (F = 20 T, m* = 0.07, T_D = 1 K, the invented test
/// input) at `temperature` over `fields`, with a Hall slope for rho_xy.
fn sdh_rows(temperature: f64, fields: &[f64]) -> Vec<(f64, f64, f64, f64)> {
    let model = SdhModel {
        background_ohm_sq: vec![100.0, 0.0, 2.0],
        components: vec![OscillationComponent {
            amplitude: 0.2,
            ..OscillationComponent::two_dimensional(20.0, 0.07, 1.0)
        }],
    };
    fields
        .iter()
        .map(|&b| (temperature, b, model.rho_xx_ohm_sq(b, temperature), -60.0 * b))
        .collect()
}

// mr.oscillations on positive-only sweeps logged densely along a ramp: 40,000 readings from
// 0 to 14 T per temperature, 3.5e-4 T apart, with a stated field resolution of 5 mT, so that
// every reading is closer to the next than the resolution (the case that chained a whole
// ramp into one field and left the window "[4.5, 4.5] T" empty). Every temperature is kept,
// 2 K and 3 K apart, the field window spans the ramp, and the frequency is the model's.
#[test]
fn oscillations_run_on_dense_one_sign_ramps() {
    let temperatures = [2.0, 3.0, 4.5, 6.0];
    let rows: Vec<_> = temperatures
        .iter()
        .flat_map(|&t| sdh_rows(t, &ramp(14.0, 40_000, 1.0)))
        .collect();
    let output = run::<OscillationsAnalysis>(json!({"mass": "fit", "field_resolution_T": 5e-3}), &rows);
    let found: Vec<f64> = serde_json::from_value(output.summary["temperatures_K"].clone()).unwrap();
    assert_eq!(found, temperatures.to_vec());
    assert_eq!(output.summary["single_field_sign"], json!(true));
    let flags = output
        .warnings
        .iter()
        .filter(|w| w.contains("single_field_sign"))
        .count();
    assert_eq!(flags, 1, "{:?}", output.warnings);
    let window: Vec<f64> = serde_json::from_value(output.summary["field_window_T"].clone()).unwrap();
    assert!(window[1] > 13.9 && window[0] < 2.0, "{window:?}");
    let frequency = output.summary["frequency_T"].as_f64().unwrap();
    assert!((frequency / 20.0 - 1.0).abs() < 0.01, "{frequency}");
}

// mr.weak_localization on one field sign and on a dense ramp of 40,000 readings: flagged, and
// l_phi as from both signs (the correction is even in B).
#[test]
fn weak_localization_runs_on_one_sign_and_dense_ramps() {
    let model = WeakLocalizationModel {
        sigma_0_s: 1e-3,
        alpha: -0.5,
        phase_coherence_length_m: 2e-7,
        classical_s_per_t2: 0.0,
    };
    let rows = |fields: &[f64]| -> Vec<(f64, f64, f64, f64)> {
        let rho = synthetic_weak_localization_sweep(&model, fields, &SweepNoise::NONE, &mut Rng::seeded(1)).unwrap();
        fields.iter().zip(rho).map(|(&b, r)| (1.5, b, r, 0.0)).collect()
    };
    let symmetric: Vec<f64> = (-100..=100).map(|k| 0.5 * k as f64 / 100.0).collect();
    for (fields, single) in [
        (symmetric.clone(), false),
        (ramp(0.5, 101, 1.0), true),
        (ramp(0.5, 101, -1.0), true),
        (ramp(0.5, 40_000, 1.0), true),
    ] {
        let output = run::<WeakLocalizationAnalysis>(json!({}), &rows(&fields));
        assert_eq!(output.summary["single_field_sign"], json!(single));
        assert_eq!(flagged(&output), single, "{:?}", output.warnings);
        let l_phi = output.summary["phase_coherence_length_m"].as_f64().unwrap();
        assert!((l_phi / 2e-7 - 1.0).abs() < 1e-4, "{l_phi}");
    }
}

// The grouping parameters reach every analysis: bad values are refused naming them, and a
// tolerance wide enough merges two setpoints (then the single-sweep analyses refuse the
// table no more).
#[test]
fn temperature_grouping_parameters_are_checked_and_used() {
    let rows: Vec<_> = [2.0, 3.0]
        .iter()
        .flat_map(|&t| classical_rows(t, &ramp(6.0, 21, 1.0)))
        .collect();
    let error = run_typed::<RatioAnalysis>("{}", &inputs(&rows), &Host::detached()).unwrap_err();
    assert!(error.to_string().contains("temperature_tolerance_K"), "{error}");
    let merged = run::<RatioAnalysis>(json!({"temperature_tolerance_K": 2.0}), &rows);
    let mean = merged.summary["temperature_K"].as_f64().unwrap();
    assert!((mean - 2.5).abs() < 1e-12, "{mean}");
    for params in [
        json!({"temperature_tolerance_K": -1.0}),
        json!({"temperature_relative_tolerance": -0.5}),
    ] {
        let name = params.as_object().unwrap().keys().next().unwrap().clone();
        let error = run_typed::<KohlerAnalysis>(&params.to_string(), &inputs(&rows), &Host::detached()).unwrap_err();
        assert!(error.to_string().contains(&name), "{error}");
        let error =
            run_typed::<WeakLocalizationAnalysis>(&params.to_string(), &inputs(&rows), &Host::detached()).unwrap_err();
        assert!(error.to_string().contains(&name), "{error}");
    }
}

// The demo's Shubnikov-de Haas series (demo-data/heterostructure/sdh-sweeps.csv) keeps its
// six temperatures: the former fixed 1 K spread merged 2 K and 3 K into one "2.5 K" sweep.
#[test]
fn the_demo_sdh_series_keeps_six_temperatures() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo-data/heterostructure/sdh-sweeps.csv");
    let text = std::fs::read_to_string(&path).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let index = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (t, b, xx, xy) = (
        index("temperature_K"),
        index("field_T"),
        index("rho_xx_ohm_sq"),
        index("rho_xy_ohm"),
    );
    let rows: Vec<(f64, f64, f64, f64)> = lines
        .map(|line| {
            let cells: Vec<f64> = line.split(',').map(|c| c.parse().unwrap_or(f64::NAN)).collect();
            (cells[t], cells[b], cells[xx], cells[xy])
        })
        .collect();
    let frame = frame(
        rows.len(),
        vec![
            floats("temperature_K", rows.iter().map(|r| r.0).collect()),
            floats("field_T", rows.iter().map(|r| r.1).collect()),
            floats("rho_xx_ohm_sq", rows.iter().map(|r| r.2).collect()),
            floats("rho_xy_ohm", rows.iter().map(|r| r.3).collect()),
        ],
    )
    .unwrap();
    let sweeps = mobilis_sdk::sweep_table::sweeps_by_temperature(
        &frame,
        &mobilis_sdk::sweep_table::TemperatureGrouping::default(),
    )
    .unwrap();
    let temperatures: Vec<f64> = sweeps.iter().map(|s| s.temperature_k.unwrap()).collect();
    assert_eq!(temperatures, vec![2.0, 3.0, 4.5, 6.0, 8.0, 10.0]);
    assert!(sweeps.iter().all(|s| s.points.len() == 4000 && s.warnings.is_empty()));
}
