//! Faulty plugin libraries: truncated files, and plugins that crash, exit or hang in a worker.
//!
//! The faulty plugins are `tests/c-plugin/cfixture.c` built with `FIXTURE_FAULT` (they
//! misbehave on a 13-row table and sum any other) or `FIXTURE_ABORT_ON_LOAD`. Every round
//! checks that the faulty call failed with 5001 and words naming what happened, that the
//! daemon still answers `server.info`, that a good call to the same plugin then succeeds in a
//! fresh worker, and that the dataset stored before the fault is still whole ("lost").

use super::counts;
use mobilis_client::ClientError;
use mobilis_tests::{plugin_library, workspace_root, TestDaemon};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

/// The target triple of this machine, which `cc` needs outside a build script.
fn host_triple() -> &'static str {
    static TRIPLE: OnceLock<String> = OnceLock::new();
    TRIPLE.get_or_init(|| {
        let rustc = std::env::var("RUSTC").unwrap_or_else(|_| "rustc".into());
        let output = Command::new(&rustc).arg("-vV").output().expect("rustc -vV runs");
        String::from_utf8_lossy(&output.stdout)
            .lines()
            .find_map(|line| line.strip_prefix("host: "))
            .expect("rustc -vV names the host")
            .trim()
            .to_owned()
    })
}

/// Builds `cfixture.c` with `defines` into `dir/libNAME.so`.
fn build_fixture(dir: &Path, name: &str, defines: &[(&str, Option<&str>)]) -> PathBuf {
    let source = workspace_root().join("tests/c-plugin/cfixture.c");
    let mut build = cc::Build::new();
    build
        .include(workspace_root().join("core/sdk/include"))
        .std("c99")
        .warnings(true)
        .warnings_into_errors(true)
        .pic(true)
        .opt_level(0)
        .debug(false)
        .target(host_triple())
        .host(host_triple())
        .out_dir(dir)
        .cargo_metadata(false);
    for (key, value) in defines {
        build.define(key, *value);
    }
    let compiler = build.get_compiler();
    let library = dir.join(format!(
        "{}{name}{}",
        std::env::consts::DLL_PREFIX,
        std::env::consts::DLL_SUFFIX
    ));
    let output = compiler
        .to_command()
        .args(["-shared", "-fPIC", "-o"])
        .arg(&library)
        .arg(&source)
        .output()
        .expect("the C compiler runs");
    assert!(
        output.status.success(),
        "compiling {name} failed:\n{}",
        String::from_utf8_lossy(&output.stderr)
    );
    library
}

/// A daemon running the plugins of `dir` isolated, with a short per-call deadline.
async fn isolated_daemon(dir: &Path, call_timeout_s: &str) -> TestDaemon {
    let dir = dir.to_owned();
    let call_timeout_s = call_timeout_s.to_owned();
    TestDaemon::start_with(move |options| {
        options.plugin_dirs.push(dir);
        options
            .extra_arguments
            .extend(["--plugin-call-timeout".to_owned(), call_timeout_s]);
    })
    .await
}

fn sum_call(input: &str, output: &str) -> Value {
    json!({"analysis": "cfixture.sum", "inputs": {"values": input}, "output": output, "overwrite": true})
}

/// One fault, `rounds` times: the faulty call must fail with 5001 and `words`, and the
/// daemon, the plugin and the stored data must come through. Returns (failed, lost).
async fn fault_rounds(daemon: &TestDaemon, rounds: usize, words: &[&str]) -> (usize, usize) {
    daemon
        .call(
            "dataset.import",
            json!({"name": "good", "columns": {"x": [1.0, 2.0, 3.5]}}),
        )
        .await;
    let unlucky: Vec<f64> = (0..13).map(f64::from).collect();
    daemon
        .call("dataset.import", json!({"name": "unlucky", "columns": {"x": unlucky}}))
        .await;
    let (mut failed, mut lost) = (0, 0);
    for round in 0..rounds {
        let mut round_failed = false;
        match daemon.client.call("analysis.run", sum_call("unlucky", "out")).await {
            Err(ClientError::Rpc {
                code: 5001, message, ..
            }) => {
                if !words.iter().all(|w| message.contains(w)) {
                    eprintln!("round {round}: the message lacks {words:?}: {message}");
                    round_failed = true;
                }
            }
            other => {
                eprintln!("round {round}: a faulty call answered {other:?}");
                round_failed = true;
            }
        }
        if daemon.client.call("server.info", json!({})).await.is_err() {
            eprintln!("round {round}: server.info failed after the fault");
            round_failed = true;
        }
        match daemon.client.call("analysis.run", sum_call("good", "good_sum")).await {
            Ok(run) if run["summary"]["total"].as_f64() == Some(6.5) => {}
            other => {
                eprintln!("round {round}: the good call after the fault answered {other:?}");
                round_failed = true;
            }
        }
        match daemon.client.call("dataset.info", json!({"name": "good"})).await {
            Ok(info) if info["rows"] == 3 => {}
            other => {
                eprintln!("round {round}: the stored dataset is not whole: {other:?}");
                lost += 1;
            }
        }
        failed += usize::from(round_failed);
    }
    (failed, lost)
}

#[tokio::test(flavor = "multi_thread")]
async fn a_segfaulting_plugin_fails_its_call_and_the_daemon_serves_on() {
    let dir = tempfile::tempdir().unwrap();
    build_fixture(dir.path(), "cfixture", &[("FIXTURE_FAULT", Some("1"))]);
    let daemon = isolated_daemon(dir.path(), "60").await;
    let rounds = counts::rounds(3, 50);
    let (failed, lost) = fault_rounds(&daemon, rounds, &["SIGSEGV", "serves on"]).await;
    counts::report("plugin segfault (NULL dereference), isolated", rounds, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}

#[tokio::test(flavor = "multi_thread")]
async fn a_plugin_calling_exit_fails_its_call_and_the_daemon_serves_on() {
    let dir = tempfile::tempdir().unwrap();
    build_fixture(dir.path(), "cfixture", &[("FIXTURE_FAULT", Some("2"))]);
    let daemon = isolated_daemon(dir.path(), "60").await;
    let rounds = counts::rounds(3, 50);
    let (failed, lost) = fault_rounds(&daemon, rounds, &["exited with code 3"]).await;
    counts::report("plugin calls exit(3), isolated", rounds, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}

#[tokio::test(flavor = "multi_thread")]
async fn a_hanging_plugin_is_stopped_at_its_deadline_and_the_daemon_serves_on() {
    let dir = tempfile::tempdir().unwrap();
    build_fixture(dir.path(), "cfixture", &[("FIXTURE_FAULT", Some("3"))]);
    // Each round waits out the deadline and the grace before the kill: about 3 s.
    let daemon = isolated_daemon(dir.path(), "1").await;
    let rounds = counts::rounds(2, 10);
    let (failed, lost) = fault_rounds(&daemon, rounds, &["did not finish within 1 s", "--plugin-call-timeout"]).await;
    counts::report("plugin hangs past its deadline, isolated", rounds, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}

#[tokio::test(flavor = "multi_thread")]
async fn a_plugin_aborting_in_its_constructor_is_refused_in_both_modes() {
    let dir = tempfile::tempdir().unwrap();
    build_fixture(dir.path(), "cfixture", &[]);
    build_fixture(
        dir.path(),
        "cfixture_abort",
        &[
            ("FIXTURE_ABORT_ON_LOAD", None),
            ("FIXTURE_PLUGIN_NAME", Some("cfixture_abort")),
        ],
    );
    let (mut tried, mut failed) = (0, 0);
    for trusted in [false, true] {
        tried += 1;
        let path = dir.path().to_owned();
        let daemon = TestDaemon::start_with(move |options| {
            if trusted {
                options
                    .extra_arguments
                    .extend(["--trusted-plugin-dir".to_owned(), path.display().to_string()]);
            } else {
                options.plugin_dirs.push(path);
            }
        })
        .await;
        let info = daemon.call("server.info", json!({})).await;
        let refused = info["refused_plugins"].as_array().cloned().unwrap_or_default();
        let reason = refused
            .iter()
            .find(|r| r["file"].as_str().unwrap_or_default().contains("cfixture_abort"))
            .and_then(|r| r["reason"].as_str())
            .unwrap_or_default()
            .to_owned();
        let plugins = info["plugins"].as_array().cloned().unwrap_or_default();
        let good = plugins.len() == 1 && plugins[0]["name"] == "cfixture";
        if !(reason.contains("SIGABRT") && good) {
            eprintln!("trusted={trusted}: reason {reason:?}, plugins {plugins:?}");
            failed += 1;
        }
        daemon
            .call("dataset.import", json!({"name": "good", "columns": {"x": [1.0, 2.0]}}))
            .await;
        let run = daemon.call("analysis.run", sum_call("good", "good_sum")).await;
        assert_eq!(run["summary"]["total"].as_f64(), Some(3.0));
    }
    counts::report("plugin aborts in its constructor", tried, failed, 0);
    assert_eq!(failed, 0);
}

#[tokio::test(flavor = "multi_thread")]
async fn truncated_libraries_are_refused_and_the_daemon_serves_on() {
    let whole = std::fs::read(plugin_library("mobilis_hall")).expect("the hall plugin is built");
    let dir = tempfile::tempdir().unwrap();
    let trusted = tempfile::tempdir().unwrap();
    build_fixture(dir.path(), "cfixture", &[]);
    // Cut points: before the magic number is whole (the loader's own refusal), inside the
    // ELF header, at the page the report names, and further in.
    let mut cuts = vec![1, 20, 63, 4096, whole.len() / 3, whole.len() / 2, whole.len() - 1];
    if counts::slow() {
        cuts.extend((1..40).map(|i| whole.len() * i / 40));
    }
    for (index, cut) in cuts.iter().enumerate() {
        for target in [dir.path(), trusted.path()] {
            std::fs::write(target.join(format!("libhalf_{index:02}.so")), &whole[..*cut]).unwrap();
        }
    }
    let (isolated_dir, trusted_dir) = (dir.path().to_owned(), trusted.path().to_owned());
    let daemon = TestDaemon::start_with(move |options| {
        options.plugin_dirs.push(isolated_dir);
        options
            .extra_arguments
            .extend(["--trusted-plugin-dir".to_owned(), trusted_dir.display().to_string()]);
    })
    .await;
    let info = daemon.call("server.info", json!({})).await;
    let refused = info["refused_plugins"].as_array().cloned().unwrap_or_default();
    let tried = cuts.len() * 2;
    let mut failed = 0;
    for (index, cut) in cuts.iter().enumerate() {
        let file = format!("libhalf_{index:02}.so");
        let reasons: Vec<&str> = refused
            .iter()
            .filter(|r| r["file"].as_str().unwrap_or_default().ends_with(&file))
            .filter_map(|r| r["reason"].as_str())
            .collect();
        let explained = reasons
            .iter()
            .filter(|r| r.contains("truncated") || r.contains("corrupt") || r.contains("not a shared library"))
            .count();
        if explained != 2 {
            eprintln!("cut at {cut} bytes: {reasons:?}");
            failed += 2 - explained.min(2);
        }
    }
    daemon
        .call("dataset.import", json!({"name": "good", "columns": {"x": [1.0, 2.0]}}))
        .await;
    let run = daemon.call("analysis.run", sum_call("good", "good_sum")).await;
    assert_eq!(run["summary"]["total"].as_f64(), Some(3.0));
    counts::report("truncated plugin libraries", tried, failed, 0);
    assert_eq!(failed, 0, "{refused:?}");
}

#[tokio::test(flavor = "multi_thread")]
async fn a_hanging_plugin_that_ignores_cancel_is_killed_after_the_grace() {
    let dir = tempfile::tempdir().unwrap();
    build_fixture(dir.path(), "cfixture", &[("FIXTURE_FAULT", Some("3"))]);
    let daemon = isolated_daemon(dir.path(), "600").await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "good", "columns": {"x": [1.0, 2.0, 3.5]}}),
        )
        .await;
    let unlucky: Vec<f64> = (0..13).map(f64::from).collect();
    daemon
        .call("dataset.import", json!({"name": "unlucky", "columns": {"x": unlucky}}))
        .await;
    let rounds = counts::rounds(1, 5);
    let (mut failed, mut lost) = (0, 0);
    for round in 0..rounds {
        let call_id = format!("hang-{round}");
        let runner = mobilis_client::Client::connect(daemon.daemon.url(), None)
            .await
            .unwrap();
        let mut call = sum_call("unlucky", "out");
        call["call_id"] = json!(call_id);
        let running = tokio::spawn(async move { runner.call("analysis.run", call).await });
        // The call is registered, and then inside the plugin's endless loop.
        loop {
            let progress = daemon.call("analysis.progress", json!({"call_id": call_id})).await;
            if progress["running"] == true {
                break;
            }
            tokio::time::sleep(std::time::Duration::from_millis(20)).await;
        }
        tokio::time::sleep(std::time::Duration::from_millis(300)).await;
        daemon.call("analysis.cancel", json!({"call_id": call_id})).await;
        let outcome = tokio::time::timeout(std::time::Duration::from_secs(30), running).await;
        match outcome {
            Ok(Ok(Err(ClientError::Rpc {
                code: 5003, message, ..
            }))) if message.contains("was killed") => {}
            other => {
                eprintln!("round {round}: the cancelled hang answered {other:?}");
                failed += 1;
            }
        }
        match daemon.client.call("analysis.run", sum_call("good", "good_sum")).await {
            Ok(run) if run["summary"]["total"].as_f64() == Some(6.5) => {}
            other => {
                eprintln!("round {round}: the good call after the kill answered {other:?}");
                failed += 1;
            }
        }
        match daemon.client.call("dataset.info", json!({"name": "good"})).await {
            Ok(info) if info["rows"] == 3 => {}
            _ => lost += 1,
        }
    }
    counts::report("hanging plugin cancelled by its client, isolated", rounds, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}
