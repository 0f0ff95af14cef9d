//! What keeps stored data whole against the daemon's own users: one daemon per workspace,
//! pipelines checked in full before their first step writes, outputs that would replace the
//! datasets their call reads, and provenance that names the stored version of every input.

use mobilis_tests::{ensure_built, fixture_plugin_dir, TestDaemon};
use serde_json::{json, Value};
use std::process::{Command, Stdio};

/// Starts a second `mobilisd` on `workspace` and returns its exit status and log; panics,
/// after stopping it, if it starts serving instead (its ready line comes out).
fn second_daemon_on(workspace: &std::path::Path) -> (std::process::ExitStatus, String) {
    use std::io::{BufRead, Read};
    let mut child = Command::new(ensure_built().join("mobilisd"))
        .args(["--listen", "127.0.0.1:0", "--workspace"])
        .arg(workspace)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .env_remove("MOBILIS_TOKEN")
        .spawn()
        .expect("mobilisd runs");
    // Either the ready line, or nothing before the refused daemon exits and closes stdout.
    let mut first_line = String::new();
    std::io::BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut first_line)
        .unwrap();
    if first_line.contains("listening on") {
        let _ = child.kill();
        let _ = child.wait();
        panic!("a second daemon serves the workspace another holds: {first_line}");
    }
    let mut log = String::new();
    child.stderr.take().unwrap().read_to_string(&mut log).unwrap();
    (child.wait().unwrap(), log)
}

#[tokio::test(flavor = "multi_thread")]
async fn a_second_daemon_refuses_a_workspace_another_holds() {
    let plugins = fixture_plugin_dir();
    let plugin_dir = plugins.path().to_owned();
    // Isolated plugins: their worker processes must neither hold nor trip over the lock.
    let daemon = TestDaemon::start_with(move |options| options.plugin_dirs.push(plugin_dir)).await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "shared", "columns": {"x": [1.0, 2.0, 3.0]}}),
        )
        .await;
    daemon
        .call(
            "analysis.run",
            json!({"analysis": "fixture.scale", "inputs": {"values": "shared"}, "params": {"factor": 2.0}, "output": "fo"}),
        )
        .await;

    let workspace = daemon.workspace.canonicalize().unwrap();
    let (status, log) = second_daemon_on(&workspace);
    assert!(!status.success(), "{log}");
    for words in [
        workspace.display().to_string(),
        "in use by another mobilisd".to_owned(),
        format!("process {}", daemon.daemon.pid()),
        "--workspace".to_owned(),
    ] {
        assert!(log.contains(&words), "the refusal lacks `{words}`: {log}");
    }
    // The holder serves on, its datasets as they were.
    let rows = daemon.call("dataset.rows", json!({"name": "shared"})).await;
    assert_eq!(rows["columns"]["x"], json!([1.0, 2.0, 3.0]));
    assert_eq!(daemon.call("dataset.info", json!({"name": "fo"})).await["rows"], 3);

    // A killed holder leaves no lock behind (the daemon is stopped with SIGKILL), even while
    // its plugin worker may still be exiting: the next daemon opens the workspace.
    let restarted = daemon.restart().await;
    let rows = restarted.call("dataset.rows", json!({"name": "shared"})).await;
    assert_eq!(rows["columns"]["x"], json!([1.0, 2.0, 3.0]));
    let _: Value = restarted.call("dataset.info", json!({"name": "fo"})).await;
}

/// Starts a daemon with the fixture plugin (isolated) beside none of the built-in ones.
async fn daemon_with_fixture() -> (TestDaemon, tempfile::TempDir) {
    let plugins = fixture_plugin_dir();
    let plugin_dir = plugins.path().to_owned();
    let daemon = TestDaemon::start_with(move |options| options.plugin_dirs.push(plugin_dir)).await;
    (daemon, plugins)
}

/// The `x` column of a stored dataset.
async fn x_of(daemon: &TestDaemon, name: &str) -> Value {
    daemon.call("dataset.rows", json!({"name": name})).await["columns"]["x"].clone()
}

#[tokio::test(flavor = "multi_thread")]
async fn a_pipeline_with_a_bad_parameter_in_a_later_step_runs_no_step() {
    // The reported case, with the real plugins: hall.reduce overwriting its output, then a
    // freeze-out fit with a material it does not know, or a misspelt parameter name.
    let daemon = TestDaemon::start().await;
    let samples: [mobilis_tests::InventedSample; 1] = [("n-film", 250.0, 1.3, -624.15)];
    let readings = mobilis_tests::van_der_pauw_run(&samples, &[77.0, 300.0], [0.0; 6], 0.0, 20261205);
    daemon
        .call(
            "dataset.import",
            json!({"name": "readings", "columns": mobilis_tests::readings_json_columns(&readings)}),
        )
        .await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "samples", "columns": {"sample": ["n-film"], "thickness_m": [2e-6]}}),
        )
        .await;
    // What step 1 would overwrite.
    daemon
        .call("dataset.import", json!({"name": "p2-hall", "columns": {"x": [1.0]}}))
        .await;
    let hall_step = json!({"analysis": "hall.reduce", "inputs": {"readings": "readings", "samples": "samples"},
                           "output": "p2-hall", "overwrite": true});
    for (params, words) in [
        (
            json!({"material": "Xx"}),
            [
                "step 2",
                "carriers.freeze_out_fit",
                "params.material",
                "refused before any step ran",
            ],
        ),
        (
            json!({"materal": "Si"}),
            [
                "step 2",
                "carriers.freeze_out_fit",
                "materal",
                "refused before any step ran",
            ],
        ),
    ] {
        let fit_step = json!({"analysis": "carriers.freeze_out_fit", "inputs": {"hall": "p2-hall"},
                              "output": "p2-freeze", "params": params});
        let message = daemon
            .call_refused("pipeline.run", json!({"steps": [hall_step, fit_step]}), 4001, &words)
            .await;
        assert!(!message.contains("stored: p2-hall"), "{message}");
        assert_eq!(x_of(&daemon, "p2-hall").await, json!([1.0]), "step 1 ran: {message}");
        let (code, _) = daemon.call_error("dataset.info", json!({"name": "p2-freeze"})).await;
        assert_eq!(code, 4002);
    }
}

#[tokio::test(flavor = "multi_thread")]
async fn an_output_never_replaces_an_input_of_its_call() {
    let (daemon, _plugins) = daemon_with_fixture().await;
    for (name, values) in [("raw", [1.0, 2.0]), ("other", [5.0, 6.0])] {
        daemon
            .call("dataset.import", json!({"name": name, "columns": {"x": values}}))
            .await;
    }
    let scale = |input: &str, output: &str| {
        json!({"analysis": "fixture.scale", "inputs": {"values": input}, "params": {"factor": 3.0},
               "output": output, "overwrite": true})
    };

    // analysis.run onto its own input, as output or as summary_output.
    daemon
        .call_refused(
            "analysis.run",
            scale("raw", "raw"),
            4001,
            &["output `raw`", "input `values`", "choose another output name"],
        )
        .await;
    let mut with_summary = scale("raw", "scaled");
    with_summary["summary_output"] = json!("raw");
    daemon
        .call_refused(
            "analysis.run",
            with_summary,
            4001,
            &["summary_output `raw`", "choose another summary_output name"],
        )
        .await;

    // A pipeline step onto its own input, and a later step onto an earlier step's input.
    daemon
        .call_refused(
            "pipeline.run",
            json!({"steps": [scale("raw", "first"), scale("other", "other")]}),
            4001,
            &["step 2", "output `other`", "refused before any step ran"],
        )
        .await;
    daemon
        .call_refused(
            "pipeline.run",
            json!({"steps": [scale("raw", "first"), scale("other", "raw")]}),
            4001,
            &[
                "step 2",
                "output `raw`",
                "step 1 (fixture.scale) reads as input `values`",
                "refused before any step ran",
            ],
        )
        .await;
    assert_eq!(x_of(&daemon, "raw").await, json!([1.0, 2.0]));
    assert_eq!(x_of(&daemon, "other").await, json!([5.0, 6.0]));
    for never_stored in ["scaled", "first"] {
        let (code, _) = daemon.call_error("dataset.info", json!({"name": never_stored})).await;
        assert_eq!(code, 4002, "{never_stored} was stored");
    }

    // A later step may read what an earlier one wrote over a stored name no step read.
    daemon.call("analysis.run", scale("raw", "kept")).await;
    let result = daemon
        .call(
            "pipeline.run",
            json!({"steps": [scale("other", "kept"),
                             {"analysis": "fixture.identity", "inputs": {"values": "kept"}, "output": "copy"}]}),
        )
        .await;
    assert_eq!(result["steps"].as_array().unwrap().len(), 2);
}

#[tokio::test(flavor = "multi_thread")]
async fn provenance_names_the_version_of_each_input_it_read() {
    let (daemon, plugins) = daemon_with_fixture().await;
    let version_of = |info: &Value| {
        info["version"]
            .as_str()
            .expect("a stored dataset has a version")
            .to_owned()
    };
    daemon
        .call("dataset.import", json!({"name": "two", "columns": {"x": [1.0, 2.0]}}))
        .await;
    let read = version_of(&daemon.call("dataset.info", json!({"name": "two"})).await);
    assert_eq!(read.len(), 32, "{read}");
    daemon
        .call(
            "pipeline.run",
            json!({"steps": [
                {"analysis": "fixture.scale", "inputs": {"values": "two"}, "params": {"factor": 2.0},
                 "output": "scaled", "summary_output": "scaled.sum"},
                {"analysis": "fixture.identity", "inputs": {"values": "scaled"}, "output": "copied"},
            ]}),
        )
        .await;
    let scaled = daemon.call("dataset.info", json!({"name": "scaled"})).await;
    assert_eq!(scaled["provenance"]["inputs"], json!({"values": "two"}));
    assert_eq!(scaled["provenance"]["input_versions"], json!({"values": read}));
    let summary = daemon.call("dataset.info", json!({"name": "scaled.sum"})).await;
    assert_eq!(summary["provenance"]["input_versions"], json!({"values": read}));
    // A later step names the version the earlier step stored.
    let copied = daemon.call("dataset.info", json!({"name": "copied"})).await;
    assert_eq!(
        copied["provenance"]["input_versions"],
        json!({"values": version_of(&scaled)})
    );

    // The input is dropped and an unrelated table imported under its name: the output's
    // provenance still names what it read, which the new table is not.
    daemon.call("dataset.drop", json!({"name": "two"})).await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "two", "columns": {"x": [7.0, 8.0, 9.0]}}),
        )
        .await;
    let replaced = version_of(&daemon.call("dataset.info", json!({"name": "two"})).await);
    assert_ne!(replaced, read);
    // And an overwrite is a new version too.
    daemon
        .call(
            "dataset.import",
            json!({"name": "two", "columns": {"x": [7.0, 8.0, 9.0]}, "overwrite": true}),
        )
        .await;
    let overwritten = version_of(&daemon.call("dataset.info", json!({"name": "two"})).await);
    assert!(overwritten != replaced && overwritten != read);

    // Versions are stored with the datasets: a restart keeps every one.
    let daemon = daemon.restart().await;
    let scaled_again = daemon.call("dataset.info", json!({"name": "scaled"})).await;
    assert_eq!(scaled_again["version"], scaled["version"]);
    assert_eq!(scaled_again["provenance"]["input_versions"], json!({"values": read}));
    assert_eq!(
        version_of(&daemon.call("dataset.info", json!({"name": "two"})).await),
        overwritten
    );
    drop(plugins);
}
