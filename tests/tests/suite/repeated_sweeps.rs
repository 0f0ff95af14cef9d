//! A sweep imported twice into one dataset, the second copy disagreeing with the first,
//! through a real daemon: the readings of each field are merged into one point, and the
//! sweep analyses (`spectrum.multi_carrier_fit`, `mr.ratio`, `mr.two_band_fit`,
//! `spectrum.mobility`) must neither hide the disagreement nor answer as if the copies
//! were one measurement repeated: the merged points' uncertainties cover the copies'
//! scatter and a warning names the points and what to check.

use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::tensor::{symmetric_fields, synthetic_sweep, Carrier, SweepImperfections, SweepNoise};
use mobilis_physics::sweep::SweepPoint;
use mobilis_tests::TestDaemon;
use serde_json::{json, Value};

/// An invented p-type layer: 3e15 m^-2 at 2.0 m^2/Vs, rho(0) = 1 / (e n mu) = 1040 ohm/sq.
fn hole_layer() -> Carrier {
    Carrier::hole(3e15, 2.0)
}

/// 73 fields from -9 to 9 T with 1e-4 relative noise and its uncertainty stated.
fn measured_sweep() -> Vec<SweepPoint> {
    let fields = symmetric_fields(9.0, 36).unwrap();
    let noise = SweepNoise {
        absolute_ohm: 1e-3,
        relative: 1e-4,
    };
    synthetic_sweep(
        &[hole_layer()],
        &fields,
        &noise,
        &SweepImperfections::default(),
        &mut Rng::seeded(31),
    )
    .unwrap()
}

/// The sweep as `sweep` table columns with the `_unc` columns, once per entry of `copies`,
/// each copy's rho_xx and its uncertainty multiplied by that entry (1.5, as a wrong
/// geometry factor gives).
fn columns(copies: &[f64]) -> Value {
    let sweep = measured_sweep();
    let mut columns =
        json!({"field_T": [], "rho_xx_ohm_sq": [], "rho_xy_ohm": [], "rho_xx_ohm_sq_unc": [], "rho_xy_ohm_unc": []});
    for &scale in copies {
        for point in &sweep {
            let u = point.uncertainty.unwrap();
            for (name, value) in [
                ("field_T", point.field_t),
                ("rho_xx_ohm_sq", scale * point.rho_xx_ohm_sq),
                ("rho_xy_ohm", point.rho_xy_ohm),
                ("rho_xx_ohm_sq_unc", scale * u.rho_xx_ohm_sq),
                ("rho_xy_ohm_unc", u.rho_xy_ohm),
            ] {
                columns[name].as_array_mut().unwrap().push(json!(value));
            }
        }
    }
    columns
}

fn run(analysis: &str, dataset: &str, output: &str, params: Value) -> Value {
    json!({"analysis": analysis, "inputs": {"sweep": dataset}, "output": output, "params": params})
}

fn repeat_warnings(result: &Value) -> Vec<String> {
    result["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|w| w.as_str())
        .filter(|w| w.contains("repeated readings disagree"))
        .map(str::to_owned)
        .collect()
}

#[tokio::test(flavor = "multi_thread")]
async fn a_sweep_imported_twice_that_disagrees_is_not_answered_as_one_measurement() {
    let daemon = TestDaemon::start().await;
    daemon
        .call("dataset.import", json!({"name": "once", "columns": columns(&[1.0])}))
        .await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "twice", "columns": columns(&[1.0, 1.5])}),
        )
        .await;

    // mr.ratio: rho(0) of the merged zero-field readings, 1040 and 1560 ohm/sq, is their mean,
    // 1300 ohm/sq, with the standard error of that mean from their scatter, |1560 - 1040| / 2
    // = 260 ohm/sq (JCGM 100:2008, GUM 4.2.3), not the 0.09 ohm/sq their stated uncertainties
    // propagate to: each copy lies within one standard uncertainty.
    let rho0_once = 1.0 / (1.602_176_634e-19 * 3e15 * 2.0);
    let single = daemon
        .call("analysis.run", run("mr.ratio", "once", "ratio-once", json!({})))
        .await;
    assert!(repeat_warnings(&single).is_empty(), "{single}");
    let single_unc = single["summary"]["rho0_ohm_sq_unc"].as_f64().unwrap();
    assert!(single_unc < 1.0, "{single}");
    let ratio = daemon
        .call("analysis.run", run("mr.ratio", "twice", "ratio-twice", json!({})))
        .await;
    let rho0 = ratio["summary"]["rho0_ohm_sq"].as_f64().unwrap();
    let rho0_unc = ratio["summary"]["rho0_ohm_sq_unc"].as_f64().unwrap();
    assert!((rho0 / (1.25 * rho0_once) - 1.0).abs() < 1e-3, "{rho0}");
    let zero_field_reading = measured_sweep()
        .iter()
        .find(|p| p.field_t == 0.0)
        .unwrap()
        .rho_xx_ohm_sq;
    for copy in [zero_field_reading, 1.5 * zero_field_reading] {
        assert!(
            (rho0 - copy).abs() <= (1.0 + 1e-9) * rho0_unc,
            "{rho0} +- {rho0_unc} against {copy}"
        );
    }
    let warnings = repeat_warnings(&ratio);
    assert_eq!(warnings.len(), 1, "{ratio}");
    // The counts in the summary, for a report or a script: every one of the 73 points merges
    // two readings, and every one was widened to their scatter; one copy merges none.
    let counts = |result: &Value| {
        (
            result["summary"]["merged_points"].as_u64().unwrap(),
            result["summary"]["widened_points"].as_u64().unwrap(),
        )
    };
    assert_eq!(counts(&single), (0, 0), "{single}");
    assert_eq!(counts(&ratio), (73, 73), "{ratio}");
    // 73 fields: every merged point disagrees in rho_xx, the worst named with its column.
    assert!(
        warnings[0].contains("at 73 of the 73 points")
            && warnings[0].contains("rho_xx_ohm_sq")
            && warnings[0].contains("another sample"),
        "{}",
        warnings[0]
    );

    // spectrum.multi_carrier_fit: the mean of the copies is one hole layer of mobility
    // 2.0 / 1.25 = 1.6 m^2/Vs; each merged point's rho_xx now carries the copies' scatter,
    // so the mobility is no longer quoted as if known to 0.5 %, and the warning says why.
    let params = json!({"carriers": ["p"]});
    let fit_once = daemon
        .call(
            "analysis.run",
            run("spectrum.multi_carrier_fit", "once", "fit-once", params.clone()),
        )
        .await;
    assert!(repeat_warnings(&fit_once).is_empty(), "{fit_once}");
    let fit = daemon
        .call(
            "analysis.run",
            run("spectrum.multi_carrier_fit", "twice", "fit-twice", params),
        )
        .await;
    let warnings = repeat_warnings(&fit);
    assert_eq!(warnings.len(), 1, "{fit}");
    assert!(warnings[0].contains("Birge ratio"), "{}", warnings[0]);
    let mobility = |result: &Value| {
        let carrier = &result["summary"]["carriers"][0];
        (
            carrier["mobility_m2_per_Vs"].as_f64().unwrap(),
            carrier["mobility_m2_per_Vs_unc_stat"].as_f64().unwrap(),
        )
    };
    let (mu_once, mu_once_unc) = mobility(&fit_once);
    let (mu, mu_unc) = mobility(&fit);
    // One copy recovers its layer (noise 1e-4: forward model, common practice).
    assert!((mu_once / 2.0 - 1.0).abs() < 0.01, "{fit_once}");
    assert!((mu / 1.6 - 1.0).abs() < 0.01, "{fit}");
    // The statistical uncertainty now carries the copies' scatter. It still does not reach
    // the 0.4 m^2/Vs between the copies, because the fit takes the points as independent
    // while the copies differ by one factor at every field: hence the warning.
    assert!(
        mu_unc > 5.0 * mu_once_unc,
        "{mu} +- {mu_unc} against {mu_once} +- {mu_once_unc}"
    );

    // mr.two_band_fit and spectrum.mobility read the same merged points and say the same.
    let two_band = daemon
        .call("analysis.run", run("mr.two_band_fit", "twice", "two-band", json!({})))
        .await;
    assert_eq!(repeat_warnings(&two_band).len(), 1, "{two_band}");
    assert_eq!(counts(&two_band), (73, 73), "{two_band}");
    assert_eq!(counts(&fit), counts(&ratio), "{fit}");
    let spectrum = daemon
        .call(
            "analysis.run",
            run(
                "spectrum.mobility",
                "twice",
                "spectrum",
                json!({"points_per_sign": 40, "uncertainty_replicas": 2}),
            ),
        )
        .await;
    assert_eq!(repeat_warnings(&spectrum).len(), 1, "{spectrum}");
    assert_eq!(counts(&spectrum), (73, 73), "{spectrum}");
    let symmetrized = daemon
        .call("analysis.run", run("mr.symmetrize", "twice", "symmetrized", json!({})))
        .await;
    assert_eq!(counts(&symmetrized), (73, 73), "{symmetrized}");
}
