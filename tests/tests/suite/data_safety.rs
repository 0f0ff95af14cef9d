//! What keeps stored data whole against the daemon's own users: one daemon per workspace,
//! pipelines checked in full before their first step writes, outputs that would replace the
//! datasets their call reads, and provenance that names the stored version of every input.

use mobilis_tests::{ensure_built, fixture_plugin_dir, TestDaemon};
use serde_json::{json, Value};
use std::process::{Command, Stdio};

/// Starts a second `mobilisd` on `workspace` and returns its exit status and log, or panics
/// if it starts serving (its ready line comes out).
fn second_daemon_on(workspace: &std::path::Path) -> (std::process::ExitStatus, String) {
    let output = Command::new(ensure_built().join("mobilisd"))
        .args(["--listen", "127.0.0.1:0", "--workspace"])
        .arg(workspace)
        .stdin(Stdio::null())
        .env_remove("MOBILIS_TOKEN")
        .output()
        .expect("mobilisd runs");
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(
        !stdout.contains("listening on"),
        "a second daemon serves the workspace another holds: {stdout}"
    );
    (output.status, String::from_utf8_lossy(&output.stderr).into_owned())
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
