//! The carriers chain through a real daemon: the demo wafer's raw readings are imported,
//! reduced by `hall.reduce`, and `carriers.freeze_out_fit`, `carriers.arrhenius`,
//! `carriers.mobility_scattering` and `carriers.purity` run per sample as a pipeline; the
//! donor and acceptor densities, the ionization energy and the lattice exponent come back as
//! the invented truth of the demo scenario. Bad temperature series get clear errors.

use mobilis_tests::{float_column, string_column, workspace_root, TestDaemon};
use serde_json::{json, Value};

fn truth() -> Value {
    let text = std::fs::read_to_string(workspace_root().join("demo-data/si-wafer/truth.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn relative_error(actual: f64, expected: f64) -> f64 {
    (actual / expected - 1.0).abs()
}

fn step(analysis: &str, inputs: Value, output: &str, summary: Option<&str>, params: Value) -> Value {
    let mut step =
        json!({"analysis": analysis, "inputs": inputs, "output": output, "group_by": "sample", "params": params});
    if let Some(summary) = summary {
        step["summary_output"] = json!(summary);
    }
    step
}

#[tokio::test(flavor = "multi_thread")]
async fn raw_readings_to_donors_and_acceptors_through_the_daemon() {
    let demo = workspace_root().join("demo-data");
    let daemon = TestDaemon::start_with(|options| options.data_roots.push(demo.clone())).await;
    for (name, file) in [
        ("readings", "si-wafer/readings.csv"),
        ("samples", "si-wafer/samples.csv"),
    ] {
        daemon
            .call(
                "dataset.import",
                json!({"name": name, "path": demo.join(file).display().to_string()}),
            )
            .await;
    }
    let result = daemon
        .call(
            "pipeline.run",
            json!({"steps": [
                {"analysis": "hall.reduce", "inputs": {"readings": "readings", "samples": "samples"}, "output": "hall", "group_by": "sample"},
                step("carriers.freeze_out_fit", json!({"hall": "hall"}), "freeze", Some("freeze-summary"), json!({"material": "Si"})),
                step("carriers.arrhenius", json!({"hall": "hall"}), "arrhenius", Some("arrhenius-summary"), json!({})),
                step("carriers.mobility_scattering", json!({"hall": "hall", "freeze_out": "freeze-summary"}), "scattering",
                     Some("scattering-summary"),
                     json!({"material": "Si", "mobility_column": "drift_mobility_m2_per_Vs", "ionized_density": "carriers_plus_compensation"})),
                {"analysis": "carriers.purity", "inputs": {"freeze_out": "freeze-summary", "scattering": "scattering-summary"}, "output": "purity"},
            ]}),
        )
        .await;
    assert_eq!(result["steps"].as_array().unwrap().len(), 5);

    let truth = truth();
    let freeze = daemon.call("dataset.rows", json!({"name": "freeze-summary"})).await;
    let arrhenius = daemon.call("dataset.rows", json!({"name": "arrhenius-summary"})).await;
    let scattering = daemon.call("dataset.rows", json!({"name": "scattering-summary"})).await;
    let purity = daemon.call("dataset.rows", json!({"name": "purity"})).await;
    let samples = string_column(&freeze, "sample");
    assert_eq!(samples.len(), 2);
    for (row, sample) in samples.iter().enumerate() {
        let sample = sample.as_deref().unwrap();
        let expected = truth["samples"]
            .as_array()
            .unwrap()
            .iter()
            .find(|s| s["sample"] == sample)
            .unwrap();
        // The invented truth of the demo scenario (demo-data/si-wafer/truth.json); the noise is
        // 1e-4 relative, so the fits must land within a few tenths of a percent.
        let donors = float_column(&freeze, "dopant_density_m3")[row].unwrap();
        let acceptors = float_column(&freeze, "compensating_density_m3")[row].unwrap();
        let energy = float_column(&freeze, "ionization_energy_eV")[row].unwrap();
        assert!(
            relative_error(donors, expected["donor_density_m3"].as_f64().unwrap()) < 5e-3,
            "{sample}: N_D {donors}"
        );
        assert!(
            relative_error(acceptors, expected["acceptor_density_m3"].as_f64().unwrap()) < 2e-2,
            "{sample}: N_A {acceptors}"
        );
        assert!(
            relative_error(energy, expected["donor_ionization_energy_eV"].as_f64().unwrap()) < 5e-3,
            "{sample}: E_D {energy}"
        );
        assert_eq!(string_column(&freeze, "carrier_type")[row].as_deref(), Some("n"));
        // The Arrhenius slope of ln(n T^-3/2) approaches E_D only where n << N_A; over the
        // automatic range it must be within a few percent (Blakemore 1962, from memory).
        let activation = float_column(&arrhenius, "activation_energy_eV")[row].unwrap();
        assert!(
            relative_error(activation, 0.045) < 0.05,
            "{sample}: Arrhenius {activation}"
        );
        let exponent = float_column(&scattering, "lattice_exponent")[row].unwrap();
        assert!(
            (exponent - truth["mobility_model"]["lattice_exponent"].as_f64().unwrap()).abs() < 0.02,
            "{sample}: alpha {exponent}"
        );
        assert_eq!(purity["columns"]["freeze_out_consistent"][row], json!(true));
        let net = float_column(&purity, "net_doping_m3")[row].unwrap();
        let true_net =
            expected["donor_density_m3"].as_f64().unwrap() - expected["acceptor_density_m3"].as_f64().unwrap();
        assert!(relative_error(net, true_net) < 5e-3, "{sample}: net {net}");
    }

    // The fitted curve and the data come back as one table ready to plot.
    let curve = daemon
        .call("dataset.rows", json!({"name": "freeze", "limit": 1000}))
        .await;
    let kinds = string_column(&curve, "kind");
    assert!(kinds.iter().any(|k| k.as_deref() == Some("curve")) && kinds.iter().any(|k| k.as_deref() == Some("data")));
}

fn hall_table(temperatures: &[f64], densities: &[f64], types: &[&str]) -> Value {
    json!({
        "sample": vec!["x"; temperatures.len()],
        "temperature_K": temperatures,
        "density_m3": densities,
        "carrier_type": types,
    })
}

#[tokio::test(flavor = "multi_thread")]
async fn bad_temperature_series_get_clear_errors_and_the_daemon_serves_on() {
    let daemon = TestDaemon::start().await;
    let temperatures = [40.0, 60.0, 80.0, 100.0, 150.0, 200.0, 300.0];
    let good_densities = [1e19, 8e19, 4e20, 9e20, 1.8e21, 2.3e21, 2.6e21];
    let cases: Vec<(&str, Value, Value, &str)> = vec![
        (
            "too-few",
            hall_table(&temperatures[..3], &good_densities[..3], &["n"; 3]),
            json!({}),
            "temperatures",
        ),
        (
            "switching",
            hall_table(&temperatures, &good_densities, &["n", "n", "n", "p", "p", "p", "p"]),
            json!({}),
            "carrier type",
        ),
        (
            "negative",
            hall_table(
                &temperatures,
                &[1e19, -8e19, 4e20, 9e20, 1.8e21, 2.3e21, 2.6e21],
                &["n"; 7],
            ),
            json!({}),
            "density",
        ),
        (
            "out-of-range",
            hall_table(&temperatures, &good_densities, &["n"; 7]),
            json!({"temperature_min_K": 500.0}),
            "range",
        ),
    ];
    for (name, columns, params, fragment) in cases {
        daemon
            .call("dataset.import", json!({"name": name, "columns": columns}))
            .await;
        for analysis in ["carriers.freeze_out_fit", "carriers.arrhenius"] {
            let (code, message) = daemon
                .call_error(
                    "analysis.run",
                    json!({"analysis": analysis, "inputs": {"hall": name}, "output": "out", "params": params}),
                )
                .await;
            assert_eq!(code, 4007, "{analysis} on {name}: {message}");
            assert!(
                message.to_lowercase().contains(fragment),
                "{analysis} on {name}: `{message}` lacks `{fragment}`"
            );
            assert_eq!(daemon.call("server.info", json!({})).await["name"], "mobilisd");
        }
    }
    // An unknown material is refused by the parameter schema before the plugin runs.
    let (code, message) = daemon
        .call_error(
            "analysis.run",
            json!({"analysis": "carriers.freeze_out_fit", "inputs": {"hall": "too-few"}, "output": "out", "params": {"material": "unobtainium"}}),
        )
        .await;
    assert_eq!(code, 4001, "{message}");
    assert!(message.contains("material"));
}
