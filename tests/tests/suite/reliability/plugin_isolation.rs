//! Faulty plugin libraries: truncated files, and plugins that crash, exit or hang in a worker.
//!
//! The faulty plugins are `tests/c-plugin/cfixture.c` built with `FIXTURE_FAULT` (they
//! misbehave on a 13-row table and sum any other) or `FIXTURE_ABORT_ON_LOAD`. Every round
//! checks that the faulty call failed with 5001 and words naming what happened, that the
//! daemon still answers `server.info`, that a good call to the same plugin then succeeds in a
//! fresh worker, and that the dataset stored before the fault is still whole ("lost").

use super::counts;
use mobilis_client::ClientError;
use mobilis_tests::c_plugin::build_c_plugin;
use mobilis_tests::{plugin_library, TestDaemon};
use serde_json::{json, Value};
use std::path::Path;

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

/// Stores `good` (3 rows, summing to 6.5) and `unlucky` (the 13 rows the faulty plugins
/// misbehave on).
async fn import_good_and_unlucky(daemon: &TestDaemon) {
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
}

/// After a fault: a good call to the same plugin succeeds (in a fresh worker), and `good`
/// is still whole. Returns (the good call failed, the dataset was lost), the failures told
/// on stderr with the round and what came `after`.
async fn serves_on_after(daemon: &TestDaemon, round: usize, after: &str) -> (bool, bool) {
    let mut failed = false;
    match daemon.client.call("analysis.run", sum_call("good", "good_sum")).await {
        Ok(run) if run["summary"]["total"].as_f64() == Some(6.5) => {}
        other => {
            eprintln!("round {round}: the good call after {after} answered {other:?}");
            failed = true;
        }
    }
    let lost = match daemon.client.call("dataset.info", json!({"name": "good"})).await {
        Ok(info) if info["rows"] == 3 => false,
        other => {
            eprintln!("round {round}: the stored dataset is not whole: {other:?}");
            true
        }
    };
    (failed, lost)
}

/// Stores two rows and checks that the good `cfixture` sums them: the daemon serves on.
async fn the_good_plugin_sums(daemon: &TestDaemon) {
    daemon
        .call("dataset.import", json!({"name": "good", "columns": {"x": [1.0, 2.0]}}))
        .await;
    let run = daemon.call("analysis.run", sum_call("good", "good_sum")).await;
    assert_eq!(run["summary"]["total"].as_f64(), Some(3.0));
}

/// One way for an isolated plugin to fail a call.
struct Fault {
    /// What the counts report calls it.
    label: &'static str,
    /// The value of `FIXTURE_FAULT` that builds it.
    fault: &'static str,
    /// The daemon's `--plugin-call-timeout`, in seconds.
    call_timeout_s: &'static str,
    /// Rounds in a normal run and in a slow one.
    rounds: (usize, usize),
    /// The words the 5001 error must carry.
    words: &'static [&'static str],
}

/// One fault, round after round: the faulty call must fail with 5001 and the fault's words,
/// and the daemon, the plugin and the stored data must come through.
async fn the_daemon_serves_on_after(fault: Fault) {
    let dir = tempfile::tempdir().unwrap();
    build_c_plugin(dir.path(), "cfixture", &[("FIXTURE_FAULT", Some(fault.fault))]);
    let daemon = isolated_daemon(dir.path(), fault.call_timeout_s).await;
    import_good_and_unlucky(&daemon).await;
    let rounds = counts::rounds(fault.rounds.0, fault.rounds.1);
    let (mut failed, mut lost) = (0, 0);
    for round in 0..rounds {
        let mut round_failed = false;
        match daemon.client.call("analysis.run", sum_call("unlucky", "out")).await {
            Err(ClientError::Rpc {
                code: 5001, message, ..
            }) => {
                if !fault.words.iter().all(|w| message.contains(w)) {
                    eprintln!("round {round}: the message lacks {:?}: {message}", fault.words);
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
        let (good_failed, round_lost) = serves_on_after(&daemon, round, "the fault").await;
        failed += usize::from(round_failed || good_failed);
        lost += usize::from(round_lost);
    }
    counts::report(fault.label, rounds, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}

#[tokio::test(flavor = "multi_thread")]
async fn a_segfaulting_plugin_fails_its_call_and_the_daemon_serves_on() {
    the_daemon_serves_on_after(Fault {
        label: "plugin segfault (NULL dereference), isolated",
        fault: "1",
        call_timeout_s: "60",
        rounds: (3, 50),
        words: &["SIGSEGV", "serves on"],
    })
    .await
}

#[tokio::test(flavor = "multi_thread")]
async fn a_plugin_calling_exit_fails_its_call_and_the_daemon_serves_on() {
    the_daemon_serves_on_after(Fault {
        label: "plugin calls exit(3), isolated",
        fault: "2",
        call_timeout_s: "60",
        rounds: (3, 50),
        words: &["exited with code 3"],
    })
    .await
}

#[tokio::test(flavor = "multi_thread")]
async fn a_hanging_plugin_is_stopped_at_its_deadline_and_the_daemon_serves_on() {
    // Each round waits out the deadline and the grace before the kill: about 3 s.
    the_daemon_serves_on_after(Fault {
        label: "plugin hangs past its deadline, isolated",
        fault: "3",
        call_timeout_s: "1",
        rounds: (2, 10),
        words: &["did not finish within 1 s", "--plugin-call-timeout"],
    })
    .await
}

#[tokio::test(flavor = "multi_thread")]
async fn a_plugin_aborting_in_its_constructor_is_refused_in_both_modes() {
    let dir = tempfile::tempdir().unwrap();
    build_c_plugin(dir.path(), "cfixture", &[]);
    build_c_plugin(
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
        the_good_plugin_sums(&daemon).await;
    }
    counts::report("plugin aborts in its constructor", tried, failed, 0);
    assert_eq!(failed, 0);
}

#[tokio::test(flavor = "multi_thread")]
async fn truncated_libraries_are_refused_and_the_daemon_serves_on() {
    let whole = std::fs::read(plugin_library("mobilis_hall")).expect("the hall plugin is built");
    let dir = tempfile::tempdir().unwrap();
    let trusted = tempfile::tempdir().unwrap();
    build_c_plugin(dir.path(), "cfixture", &[]);
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
    the_good_plugin_sums(&daemon).await;
    counts::report("truncated plugin libraries", tried, failed, 0);
    assert_eq!(failed, 0, "{refused:?}");
}

#[tokio::test(flavor = "multi_thread")]
async fn a_hanging_plugin_that_ignores_cancel_is_killed_after_the_grace() {
    let dir = tempfile::tempdir().unwrap();
    build_c_plugin(dir.path(), "cfixture", &[("FIXTURE_FAULT", Some("3"))]);
    let daemon = isolated_daemon(dir.path(), "600").await;
    import_good_and_unlucky(&daemon).await;
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
        let (good_failed, round_lost) = serves_on_after(&daemon, round, "the kill").await;
        failed += usize::from(good_failed);
        lost += usize::from(round_lost);
    }
    counts::report("hanging plugin cancelled by its client, isolated", rounds, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}
