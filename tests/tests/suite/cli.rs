//! The `mobilis` command line against a real daemon and the real plugins: what a run prints
//! (the fitted values in customary units with uncertainties, the fit quality, the warnings),
//! `--summary-output`, `describe`, `export --units customary`, and errors in the words of
//! the command line (options, not JSON fields).

use mobilis_tests::{run_cli, workspace_root, TestDaemon};
use serde_json::json;

/// Runs the CLI against `url`; returns whether it succeeded, its stdout and its stderr.
fn mobilis(url: &str, arguments: &[&str]) -> (bool, String, String) {
    let run = run_cli(url, "never", arguments);
    (run.success, run.stdout, run.stderr)
}

/// Runs the CLI and requires success; returns stdout.
fn mobilis_ok(url: &str, arguments: &[&str]) -> String {
    let (ok, stdout, stderr) = mobilis(url, arguments);
    assert!(ok, "mobilis {arguments:?} failed:\n{stdout}\n{stderr}");
    stdout
}

/// Runs the CLI and requires failure; returns stderr.
fn mobilis_fails(url: &str, arguments: &[&str]) -> String {
    let (ok, stdout, stderr) = mobilis(url, arguments);
    assert!(!ok, "mobilis {arguments:?} should have failed:\n{stdout}");
    stderr
}

/// A daemon that may read the demo data, with the silicon wafer's readings and sample sheet
/// imported and reduced.
async fn daemon_with_silicon() -> TestDaemon {
    let demo = workspace_root().join("demo-data");
    let roots = demo.clone();
    let daemon = TestDaemon::start_with(move |options| options.data_roots.push(roots)).await;
    let url = daemon.daemon.url().to_owned();
    let readings = demo.join("si-wafer/readings.csv");
    let samples = demo.join("si-wafer/samples.csv");
    mobilis_ok(&url, &["import", "si-readings", readings.to_str().unwrap()]);
    mobilis_ok(&url, &["import", "si-samples", samples.to_str().unwrap()]);
    mobilis_ok(
        &url,
        &[
            "run",
            "hall.reduce",
            "--input",
            "readings=si-readings",
            "--input",
            "samples=si-samples",
            "--output",
            "si-hall",
            "--group-by",
            "sample",
        ],
    );
    daemon
}

#[tokio::test(flavor = "multi_thread")]
async fn run_prints_the_fitted_values_and_stores_the_summary() {
    let daemon = daemon_with_silicon().await;
    let url = daemon.daemon.url();
    let printed = mobilis_ok(
        url,
        &[
            "run",
            "carriers.freeze_out_fit",
            "--input",
            "hall=si-hall",
            "--output",
            "si-freeze-out",
            "--group-by",
            "sample",
            "--params",
            r#"{"material": "Si"}"#,
            "--summary-output",
            "si-freeze-out-summary",
        ],
    );
    // The demo wafer's pieces were made with N_D = 3.0e15 and 3.2e15 cm^-3, E_D = 45 meV.
    for expected in [
        "si-freeze-out -> ",
        "summary stored as si-freeze-out-summary (2 rows)",
        "[sample=SiRef-centre]",
        "[sample=SiRef-edge]",
        "fit: reduced chi-square",
    ] {
        assert!(printed.contains(expected), "no `{expected}` in:\n{printed}");
    }
    let line = |name: &str| -> Vec<String> {
        printed
            .lines()
            .filter(|line| line.trim_start().starts_with(name))
            .map(str::to_owned)
            .collect()
    };
    let donors = line("dopant density");
    assert_eq!(donors.len(), 2, "{printed}");
    for (row, truth) in donors.iter().zip([3.0, 3.2]) {
        // `dopant density  3.000e15 ± 0.038e15 cm^-3`
        let fields: Vec<&str> = row.split_whitespace().collect();
        assert_eq!(fields[fields.len() - 1], "cm^-3", "{row}");
        assert_eq!(fields[fields.len() - 3], "±", "{row}");
        let value: f64 = fields[fields.len() - 4].parse().unwrap();
        let uncertainty: f64 = fields[fields.len() - 2].parse().unwrap();
        assert!((value / 1e15 - truth).abs() < 0.1, "{row}");
        assert!(uncertainty > 0.0 && uncertainty < 0.1 * value, "{row}");
    }
    for row in line("ionization energy") {
        assert!(row.trim_end().ends_with("meV"), "{row}");
        let value: f64 = row.split_whitespace().nth(2).unwrap().parse().unwrap();
        assert!((value - 45.0).abs() < 2.0, "{row}");
    }
    // The stored summary holds the same numbers, in SI.
    let summary = daemon
        .call("dataset.rows", json!({"name": "si-freeze-out-summary"}))
        .await;
    let donors = summary["columns"]["dopant_density_m3"].as_array().unwrap();
    assert!((donors[0].as_f64().unwrap() / 3.0e21 - 1.0).abs() < 0.03, "{summary}");

    // Warnings are printed once, under their group.
    let arrhenius = mobilis_ok(
        url,
        &[
            "run",
            "carriers.arrhenius",
            "--input",
            "hall=si-hall",
            "--output",
            "si-arrhenius",
            "--group-by",
            "sample",
        ],
    );
    assert!(
        arrhenius.contains("activation energy") && arrhenius.contains(" meV"),
        "{arrhenius}"
    );
    let warnings = arrhenius.matches("warning: ").count();
    assert!(warnings >= 1 && !arrhenius.contains("warning: [sample="), "{arrhenius}");
}

#[tokio::test(flavor = "multi_thread")]
async fn errors_name_the_options_to_change() {
    let daemon = daemon_with_silicon().await;
    let url = daemon.daemon.url();
    // (arguments, what the message must say, what it must not)
    let cases: &[(&[&str], &[&str], &[&str])] = &[
        (
            &["run", "hall.reduce", "--input", "samples=si-samples", "--output", "x"],
            &["needs input role `readings`", "--input readings=DATASET"],
            &["pass inputs", "{"],
        ),
        (
            &[
                "run",
                "hall.reduce",
                "--input",
                "readings=si-readings",
                "--output",
                "si-hall",
            ],
            &["exists already", "--overwrite", "--output"],
            &["overwrite: true"],
        ),
        (
            &[
                "run",
                "hall.reduce",
                "--input",
                "readings=si-readings",
                "--output",
                "x",
                "--params",
                r#"{"temperature_tolerance_K": "half"}"#,
            ],
            &[
                "--params key `temperature_tolerance_K`",
                "mobilis describe hall.reduce",
                r#"--params '{"temperature_tolerance_K": VALUE}'"#,
            ],
            &["params.", "analysis.describe"],
        ),
        (
            &["run", "hall.reduce", "--input", "readings=run17", "--output", "x"],
            &["no dataset named `run17`", "`mobilis datasets`", "mobilis import"],
            &["dataset.list", "dataset.import"],
        ),
        (
            &[
                "run",
                "hall.reduce",
                "--input",
                "readings=si-readings",
                "--output",
                "x",
                "--group-by",
                "wafer",
            ],
            &["--group-by column `wafer`", "its columns are: ", "sample", "field_T"],
            &["group_by"],
        ),
        (
            &[
                "run",
                "hall.reduce",
                "--input",
                "readings=si-readings",
                "--output",
                "x",
                "--group-by",
                "sample",
                "--group-tolerance",
                "sample=1",
            ],
            &[
                "--group-tolerance applies to numeric columns",
                "`sample`",
                "leave it out of --group-tolerance",
            ],
            &["group_tolerance"],
        ),
        (
            &["run", "hall.reduc", "--input", "readings=si-readings", "--output", "x"],
            &["no analysis named `hall.reduc`", "did you mean hall.reduce?"],
            &[],
        ),
        (
            &[
                "run",
                "carriers.freeze_out_fit",
                "--input",
                "hall=si-hall",
                "--output",
                "x",
                "--summary-output",
                "si-hall",
            ],
            &["exists already", "--summary-output", "--overwrite"],
            &["summary_output", "overwrite: true"],
        ),
    ];
    for (arguments, says, not) in cases {
        let stderr = mobilis_fails(url, arguments);
        for text in *says {
            assert!(stderr.contains(text), "{arguments:?}: no `{text}` in:\n{stderr}");
        }
        for text in *not {
            assert!(!stderr.contains(text), "{arguments:?}: `{text}` in:\n{stderr}");
        }
    }
    // `mobilis call` speaks JSON, so the daemon's own words stand there.
    let stderr = mobilis_fails(url, &["call", "dataset.rows", r#"{"name": "run17"}"#]);
    assert!(stderr.contains("dataset.list"), "{stderr}");
}

#[tokio::test(flavor = "multi_thread")]
async fn describe_shows_parameters_with_unit_default_and_meaning() {
    let daemon = TestDaemon::start().await;
    let url = daemon.daemon.url();
    let text = mobilis_ok(url, &["describe", "hall.reduce"]);
    for expected in [
        "hall.reduce (plugin hall ",
        "Inputs (--input ROLE=DATASET):",
        "readings (required): ",
        "samples (optional): ",
        "Parameters (--params '{\"NAME\": VALUE, ...}', SI units):",
        "temperature_tolerance_K  number, K; default 0.5; >= 0",
        "zero_field_tolerance_T  number, T; default 0.01",
    ] {
        assert!(text.contains(expected), "no `{expected}` in:\n{text}");
    }
    // Every declared parameter is there, each followed by its meaning.
    let described = daemon
        .call("analysis.describe", json!({"analysis": "hall.reduce"}))
        .await;
    for (name, schema) in described["params"]["properties"].as_object().unwrap() {
        assert!(text.contains(&format!("\n  {name}  ")), "{name} missing:\n{text}");
        let meaning = schema["description"].as_str().unwrap();
        let first_word = meaning.split_whitespace().next().unwrap();
        assert!(text.contains(first_word), "{name}'s meaning missing");
    }
    let stderr = mobilis_fails(url, &["describe", "carriers.arrhenus"]);
    assert!(
        stderr.contains("no analysis named `carriers.arrhenus`") && stderr.contains("did you mean carriers.arrhenius?"),
        "{stderr}"
    );
}

#[tokio::test(flavor = "multi_thread")]
async fn export_writes_customary_units_when_asked() {
    let out = tempfile::tempdir().unwrap();
    let root = out.path().to_owned();
    let daemon = TestDaemon::start_with(move |options| options.data_roots.push(root)).await;
    let url = daemon.daemon.url();
    // Round numbers: 1e21 m^-3 = 1e15 cm^-3, 0.15 m^2/(V s) = 1500 cm^2/(V s), 0.02 ohm m =
    // 2 ohm cm, 5e-4 m = 500 um (SI prefixes).
    daemon
        .call(
            "dataset.import",
            json!({"name": "round", "columns": {
                "sample": ["a"], "temperature_K": [300.0], "density_m3": [1.0e21], "density_m3_unc": [2.0e19],
                "hall_mobility_m2_per_Vs": [0.15], "resistivity_ohm_m": [0.02], "thickness_m": [5.0e-4]
            }}),
        )
        .await;
    let customary = out.path().join("round-customary.csv");
    let printed = mobilis_ok(
        url,
        &["export", "round", customary.to_str().unwrap(), "--units", "customary"],
    );
    assert!(printed.contains("(customary units)"), "{printed}");
    let text = std::fs::read_to_string(&customary).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        "sample,temperature_K,density_cm3,density_cm3_unc,hall_mobility_cm2_per_Vs,resistivity_ohm_cm,thickness_um"
    );
    let values: Vec<f64> = lines
        .next()
        .unwrap()
        .split(',')
        .skip(1)
        .map(|v| v.parse().unwrap())
        .collect();
    for (got, want) in values.iter().zip([300.0, 1.0e15, 2.0e13, 1500.0, 2.0, 500.0]) {
        assert!((got - want).abs() <= 1e-9 * want, "{got} != {want} in\n{text}");
    }
    // The default stays SI, as stored.
    let si = out.path().join("round-si.csv");
    mobilis_ok(url, &["export", "round", si.to_str().unwrap()]);
    let text = std::fs::read_to_string(&si).unwrap();
    assert!(
        text.starts_with("sample,temperature_K,density_m3,density_m3_unc,"),
        "{text}"
    );
    assert!(text.contains("\na,300.0,1e+21,2e+19,0.15,0.02,0.0005"), "{text}");
}
