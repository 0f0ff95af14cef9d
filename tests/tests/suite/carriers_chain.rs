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
    // The derived parameter schemas are checked before a call: a choice, a bound, a nested
    // override and an unknown name are refused naming the parameter and what it takes.
    for (analysis, role, params, expected) in [
        (
            "carriers.freeze_out_fit",
            "hall",
            json!({"carrier_type": "x"}),
            r#"params.carrier_type must be one of "n", "p", null"#,
        ),
        (
            "carriers.freeze_out_fit",
            "hall",
            json!({"compensation_bounds": [0.1, 1.0]}),
            "params.compensation_bounds[1] must be less than 1",
        ),
        (
            "carriers.arrhenius",
            "hall",
            json!({"regime": "frozen"}),
            r#"params.regime must be one of "compensated", "uncompensated""#,
        ),
        (
            "carriers.arrhenius",
            "hall",
            json!({"min_points": 2}),
            "params.min_points must be at least 3",
        ),
        (
            "carriers.arrhenius",
            "hall",
            json!({"hall_factor_table": [[30.0, 1.9, 2.0]]}),
            "params.hall_factor_table[0] must have at most 2 items",
        ),
        (
            "carriers.mobility_scattering",
            "hall",
            json!({"neutral": "some"}),
            r#"params.neutral must be one of "none", "fitted", "from_carriers""#,
        ),
        (
            "carriers.mobility_scattering",
            "hall",
            json!({"relative_uncertainty_floor": 1}),
            "params.relative_uncertainty_floor must be less than 1",
        ),
        (
            "carriers.mobility_scattering",
            "hall",
            json!({"material_overrides": {"band_gap_0K_eV": 0}}),
            "params.material_overrides.band_gap_0K_eV must be greater than 0",
        ),
        (
            "carriers.mobility_scattering",
            "hall",
            json!({"material_overrides": {"gap": 1.1}}),
            "params.material_overrides.gap is not a known parameter",
        ),
        (
            "carriers.purity",
            "freeze_out",
            json!({"consistency_sigma_multiple": 0}),
            "params.consistency_sigma_multiple must be greater than 0",
        ),
        (
            "carriers.purity",
            "freeze_out",
            json!({"material": "Si"}),
            "params.material is not a known parameter",
        ),
    ] {
        let (code, message) = daemon
            .call_error(
                "analysis.run",
                json!({"analysis": analysis, "inputs": {role: "too-few"}, "output": "out", "params": params}),
            )
            .await;
        assert_eq!(code, 4001, "{analysis}: {message}");
        assert!(message.contains(expected), "{analysis}: `{message}` lacks `{expected}`");
    }
}

/// Realizations of the drifting-lab series below: enough for a 1-sigma fraction good to about
/// +-6 % by default, more under `MOBILIS_SLOW_TESTS=1`.
fn lab_series_realizations() -> usize {
    if mobilis_tests::slow_tests() {
        200
    } else {
        60
    }
}

/// The raw readings of many silicon series measured as a real lab measures them, reduced and
/// fitted through the daemon: the error bars of N_D, N_A and E_D must hold the truth as often
/// as one and two standard uncertainties promise, and N_D must come back within 5 % once the
/// thickness calibration error (which no fit can know) is divided out.
///
/// The invented sample: a compensated silicon series, N_D 3.3e15 cm^-3, N_A 4.1e14 cm^-3,
/// E_D 45.2 meV, 24 K to 400 K. The lab (`LabConditions::TYPICAL`): current autoranged to
/// 10 mV, 1 uV voltmeter noise, 30 mK stage drift between readings, 3 mT remanence at nominal
/// zero, 0.3 mT field wander, and calibration errors drawn once per series (thickness 3 %,
/// field 0.5 %, current 0.1 %, voltage 0.01 %, thermometer 20 mK), stated to `hall.reduce`
/// as the lab would state them. Each realization is one sample of one imported table, so one
/// `group_by: sample` call reduces or fits them all.
#[tokio::test(flavor = "multi_thread")]
async fn a_drifting_lab_series_gives_freeze_out_error_bars_that_cover_the_truth() {
    use mobilis_numerics::fit::Coverage;
    use mobilis_numerics::noise::Rng;
    use mobilis_physics::forward::readings::{
        lab_van_der_pauw_series, LabConditions, MeasurementProtocol, VanDerPauwSample, VoltageNoise,
    };
    use mobilis_physics::forward::statistics::{BandModel, Dopants};
    use mobilis_physics::forward::transport::{n_type_transport, MobilityModel};

    const DONORS_M3: f64 = 3.3e21;
    const ACCEPTORS_M3: f64 = 4.1e20;
    const DONOR_LEVEL_EV: f64 = 0.0452;
    const THICKNESS_M: f64 = 500e-6;
    let lab = LabConditions::TYPICAL;
    let spread = lab.calibration_spread;
    let dopants = Dopants::new(DONORS_M3, ACCEPTORS_M3, DONOR_LEVEL_EV, 0.045);
    let bands = BandModel::silicon();
    let model = MobilityModel {
        hall_factor: 1.0,
        ..MobilityModel::silicon_electrons()
    };
    // Every 4 K from 24 K to 100 K, then every 15 K from 115 K to 400 K.
    let setpoints: Vec<f64> = (0..20)
        .map(|i| 24.0 + 4.0 * i as f64)
        .chain((1..=20).map(|i| 100.0 + 15.0 * i as f64))
        .collect();
    let protocol = MeasurementProtocol {
        noise: VoltageNoise {
            absolute_v: 1e-6,
            relative: 0.0,
        },
        ..MeasurementProtocol::van_der_pauw(1e-6, vec![0.5])
    }
    .with_resistance_at_zero_and_hall_in_field();

    let realizations = lab_series_realizations();
    let mut rng = Rng::seeded(0x0D0E_2026);
    let mut columns: std::collections::BTreeMap<&str, Vec<Value>> = std::collections::BTreeMap::new();
    let mut sheet_names = Vec::new();
    let mut sheet_thickness = Vec::new();
    let mut sheet_thickness_unc = Vec::new();
    let mut thickness_errors = Vec::new();
    for realization in 0..realizations {
        let name = format!("Si-{realization:03}");
        let sample_at = |temperature_k: f64| {
            let layer = n_type_transport(&dopants, &bands, THICKNESS_M, temperature_k, &model)?;
            let mut sample = VanDerPauwSample::ideal(
                name.as_str(),
                temperature_k,
                layer.sheet_resistance_ohm_sq,
                1.1,
                layer.sheet_hall_coefficient_m2_per_c,
            );
            sample.thermoelectric_offsets_v = [4e-6, -3e-6, 2e-6, -5e-6, 6e-6, -1e-6];
            sample.hall_misalignment_ohm = [
                0.02 * layer.sheet_resistance_ohm_sq,
                -0.02 * layer.sheet_resistance_ohm_sq,
            ];
            Ok(sample)
        };
        let series = lab_van_der_pauw_series(&setpoints, sample_at, &protocol, &lab, &mut rng).expect("valid series");
        for reading in &series.readings {
            columns.entry("sample").or_default().push(json!(reading.sample));
            columns
                .entry("temperature_K")
                .or_default()
                .push(json!(reading.temperature_k));
            columns.entry("field_T").or_default().push(json!(reading.field_t));
            columns.entry("i_in").or_default().push(json!(reading.i_in));
            columns.entry("i_out").or_default().push(json!(reading.i_out));
            columns.entry("v_pos").or_default().push(json!(reading.v_pos));
            columns.entry("v_neg").or_default().push(json!(reading.v_neg));
            columns.entry("current_A").or_default().push(json!(reading.current_a));
            columns.entry("voltage_V").or_default().push(json!(reading.voltage_v));
        }
        sheet_names.push(name.clone());
        sheet_thickness.push(series.calibration.stated_thickness_m(THICKNESS_M));
        sheet_thickness_unc.push(spread.thickness_rel * THICKNESS_M);
        thickness_errors.push(series.calibration.thickness_rel);
    }

    let daemon = TestDaemon::start().await;
    daemon
        .call("dataset.import", json!({"name": "lab-readings", "columns": columns}))
        .await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "lab-sheet", "columns": {"sample": sheet_names, "thickness_m": sheet_thickness, "thickness_m_unc": sheet_thickness_unc}}),
        )
        .await;
    let calibrations = json!({
        "field_calibration_rel": spread.field_rel,
        "current_calibration_rel": spread.current_rel,
        "voltage_calibration_rel": spread.voltage_rel,
        "temperature_accuracy_K": spread.thermometer_offset_k,
    });
    daemon
        .call(
            "pipeline.run",
            json!({"steps": [
                {"analysis": "hall.reduce", "inputs": {"readings": "lab-readings", "samples": "lab-sheet"}, "output": "lab-hall", "group_by": "sample", "params": calibrations},
                step("carriers.freeze_out_fit", json!({"hall": "lab-hall"}), "lab-freeze", Some("lab-freeze-summary"), json!({"material": "Si"})),
            ]}),
        )
        .await;
    let hall = daemon
        .call("dataset.rows", json!({"name": "lab-hall", "limit": 1}))
        .await;
    assert_eq!(
        hall["total_rows"],
        json!(realizations * setpoints.len()),
        "one row per sample and setpoint"
    );
    let freeze = daemon
        .call(
            "dataset.rows",
            json!({"name": "lab-freeze-summary", "limit": realizations}),
        )
        .await;
    let samples = string_column(&freeze, "sample");
    assert_eq!(samples.len(), realizations);

    let mut donors = Coverage::default();
    let mut acceptors = Coverage::default();
    let mut level = Coverage::default();
    let mut worst_donor_error: f64 = 0.0;
    for (row, sample) in samples.iter().enumerate() {
        let index = sheet_names
            .iter()
            .position(|name| Some(name) == sample.as_ref())
            .unwrap();
        let value = |column: &str| float_column(&freeze, column)[row].unwrap_or(f64::NAN);
        donors.record(value("dopant_density_m3"), value("dopant_density_m3_unc"), DONORS_M3);
        acceptors.record(
            value("compensating_density_m3"),
            value("compensating_density_m3_unc"),
            ACCEPTORS_M3,
        );
        level.record(
            value("ionization_energy_eV"),
            value("ionization_energy_eV_unc"),
            DONOR_LEVEL_EV,
        );
        // A thickness stated 3 % high makes every density, and N_D, 3 % low; no fit can know it.
        let calibrated = value("dopant_density_m3") * (1.0 + thickness_errors[index]);
        worst_donor_error = worst_donor_error.max(relative_error(calibrated, DONORS_M3));
    }
    for (quantity, coverage) in [("N_D", &donors), ("N_A", &acceptors), ("E_D", &level)] {
        eprintln!("freeze-out {quantity}: {}", coverage.describe());
        // The project's rule for honest error bars: 55-80 % within 1 sigma, >= 90 % within 2.
        assert!(coverage.is_honest(), "freeze-out {quantity}: {}", coverage.describe());
    }
    eprintln!(
        "freeze-out N_D with the thickness error divided out: worst {:.2} %",
        100.0 * worst_donor_error
    );
    assert!(
        worst_donor_error < 0.05,
        "N_D off by {:.2} % once the thickness error is divided out",
        100.0 * worst_donor_error
    );
}
