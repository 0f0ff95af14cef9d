//! Path attacks (the workspace included), bounded calls and figures, paged listings.
//!
//! - Imports and exports aimed at the workspace through `..`, absolute paths, symlinked
//!   directories and files, hard links, a data root that contains the workspace, and a
//!   directory swapped for a symlink while the calls run: each is refused or lands outside
//!   the workspace, and no workspace file changes (`lost` counts changed or vanished files).
//! - Exports are written under a temporary name and renamed into place; an existing file is
//!   replaced only with `overwrite`, also when several exports race for one name.
//! - A call whose client goes away (HTTP and WebSocket) stops; a call past its `deadline_s`
//!   is answered 5005 at once and stores nothing.
//! - A figure of a million rows in a thousand series is refused with 4009 naming `filter`.

use super::counts;
use mobilis_client::{Client, ClientError};
use mobilis_tests::{fixture_plugin_dir, run_cli, TestDaemon};
use serde_json::{json, Value};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Every file of the workspace with its bytes.
fn snapshot(workspace: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut files = BTreeMap::new();
    let mut directories = vec![workspace.to_owned()];
    while let Some(directory) = directories.pop() {
        for entry in std::fs::read_dir(&directory).unwrap().flatten() {
            let path = entry.path();
            if path.is_dir() {
                directories.push(path);
            } else if let Ok(bytes) = std::fs::read(&path) {
                files.insert(path, bytes);
            }
        }
    }
    files
}

/// How many files of `before` changed or vanished.
fn lost_files(before: &BTreeMap<PathBuf, Vec<u8>>, workspace: &Path) -> usize {
    let after = snapshot(workspace);
    before
        .iter()
        .filter(|(path, bytes)| after.get(*path) != Some(*bytes))
        .count()
}

/// The workspace files of dataset `name`, whatever the store's layout.
fn files_of(workspace: &Path, name: &str) -> Vec<PathBuf> {
    snapshot(workspace)
        .into_keys()
        .filter(|p| p.file_name().is_some_and(|f| f.to_string_lossy().contains(name)))
        .collect()
}

fn code_of(result: &Result<Value, ClientError>) -> Option<i32> {
    match result {
        Ok(_) => None,
        Err(ClientError::Rpc { code, .. }) => Some(*code),
        Err(_) => Some(0),
    }
}

async fn store_two(daemon: &TestDaemon) {
    for name in ["victim", "src"] {
        daemon
            .call(
                "dataset.import",
                json!({"name": name, "columns": {"x": [1.0, 2.0, 3.0], "who": [name, name, name]}}),
            )
            .await;
    }
}

/// Exports and imports aimed at the workspace; returns (tried, failed).
async fn attack(daemon: &TestDaemon, prefix: &str) -> (usize, usize) {
    let workspace = daemon.workspace.canonicalize().unwrap();
    let victims = files_of(&workspace, "victim");
    assert!(!victims.is_empty(), "the victim dataset has no files in the workspace");
    let relative_workspace = format!("{prefix}workspace");
    let mut paths: Vec<String> = Vec::new();
    for victim in &victims {
        let inside = victim.strip_prefix(&workspace).unwrap().to_string_lossy().into_owned();
        paths.push(victim.display().to_string());
        paths.push(format!("{relative_workspace}/{inside}"));
        paths.push(format!("{relative_workspace}/../workspace/{inside}"));
        paths.push(format!("door/{}", victim.file_name().unwrap().to_string_lossy()));
        paths.push(format!("{relative_workspace}/{inside}.new.parquet"));
    }
    paths.push(format!("{relative_workspace}/fresh.parquet"));
    paths.push(workspace.display().to_string());
    paths.push("victim-link.parquet".into());
    let mut tried = 0;
    let mut failed = 0;
    for path in &paths {
        for overwrite in [false, true] {
            let result = daemon
                .client
                .call(
                    "dataset.export",
                    json!({"name": "src", "path": path, "format": "parquet", "overwrite": overwrite}),
                )
                .await;
            tried += 1;
            if code_of(&result) != Some(4006) {
                eprintln!("export to {path} (overwrite {overwrite}) was not refused: {result:?}");
                failed += 1;
            }
        }
        let result = daemon
            .client
            .call(
                "dataset.import",
                json!({"name": "stolen", "path": path, "format": "parquet"}),
            )
            .await;
        tried += 1;
        // A path into the workspace that names no file may fail as a missing file (4008);
        // anything read is a failure.
        if !matches!(code_of(&result), Some(4006) | Some(4008)) {
            eprintln!("import of {path} was not refused: {result:?}");
            failed += 1;
        }
    }
    // A hard link to a stored file, made in the data directory.
    for (index, victim) in victims.iter().enumerate() {
        let twin = daemon.data.join(format!("twin-{index}.parquet"));
        if std::fs::hard_link(victim, &twin).is_ok() {
            let result = daemon
                .client
                .call(
                    "dataset.import",
                    json!({"name": "stolen", "path": twin.display().to_string(), "format": "parquet"}),
                )
                .await;
            tried += 1;
            if code_of(&result) != Some(4006) {
                eprintln!(
                    "import through the hard link {} was not refused: {result:?}",
                    twin.display()
                );
                failed += 1;
            }
            std::fs::remove_file(&twin).unwrap();
        }
    }
    (tried, failed)
}

fn plant_doors(daemon: &TestDaemon) {
    let workspace = daemon.workspace.canonicalize().unwrap();
    let victim = files_of(&workspace, "victim").into_iter().next().unwrap();
    std::os::unix::fs::symlink(victim.parent().unwrap(), daemon.data.join("door")).unwrap();
    std::os::unix::fs::symlink(&victim, daemon.data.join("victim-link.parquet")).unwrap();
}

#[tokio::test(flavor = "multi_thread")]
async fn paths_into_the_workspace_are_refused_and_change_nothing() {
    let mut tried = 0;
    let mut failed = 0;
    let mut lost = 0;
    // The start directory as the only root, beside the workspace.
    let daemon = TestDaemon::start().await;
    store_two(&daemon).await;
    plant_doors(&daemon);
    let info = daemon.call("server.info", json!({})).await;
    let workspace = daemon.workspace.canonicalize().unwrap();
    assert!(
        !info["data_roots"]
            .as_array()
            .unwrap()
            .iter()
            .any(|r| r.as_str() == Some(workspace.to_str().unwrap())),
        "the workspace is still a data root: {info}"
    );
    let before = snapshot(&workspace);
    let (t, f) = attack(&daemon, "../").await;
    tried += t;
    failed += f;
    lost += lost_files(&before, &workspace);
    drop(daemon);

    // A data root that contains the workspace (its parent), as the start directory too.
    let daemon = TestDaemon::start_with(|options| {
        let parent = options.workspace.as_ref().unwrap().parent().unwrap().to_owned();
        options.data_roots.push(parent.clone());
        options.working_directory = Some(parent);
    })
    .await;
    store_two(&daemon).await;
    std::fs::create_dir_all(&daemon.data).unwrap();
    let workspace = daemon.workspace.canonicalize().unwrap();
    let victim = files_of(&workspace, "victim").into_iter().next().unwrap();
    std::os::unix::fs::symlink(victim.parent().unwrap(), workspace.parent().unwrap().join("door")).unwrap();
    std::os::unix::fs::symlink(&victim, workspace.parent().unwrap().join("victim-link.parquet")).unwrap();
    let before = snapshot(&workspace);
    let (t, f) = attack(&daemon, "").await;
    tried += t;
    failed += f;
    lost += lost_files(&before, &workspace);
    // The datasets are all still there after a restart.
    let daemon = daemon.restart().await;
    let names: Vec<String> = daemon.call("dataset.list", json!({})).await["datasets"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| d["name"].as_str().unwrap().to_owned())
        .collect();
    if names != ["src", "victim"] {
        eprintln!("after the attacks the datasets are {names:?}");
        lost += 1;
    }
    counts::report("path attacks into the workspace", tried, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}

#[tokio::test(flavor = "multi_thread")]
async fn a_directory_swapped_for_a_symlink_never_leads_into_the_workspace() {
    let daemon = TestDaemon::start().await;
    store_two(&daemon).await;
    let workspace = daemon.workspace.canonicalize().unwrap();
    let victim = files_of(&workspace, "victim")
        .into_iter()
        .find(|p| p.extension().is_some_and(|e| e == "parquet"));
    let victim = victim.expect("the victim's Parquet file");
    let victim_name = victim.file_name().unwrap().to_owned();
    // A decoy of the same name outside: what a successful import must have read.
    let real = daemon.data.join("real");
    std::fs::create_dir(&real).unwrap();
    daemon
        .call("dataset.import", json!({"name": "decoy", "columns": {"decoy": [7.0]}}))
        .await;
    daemon
        .call(
            "dataset.export",
            json!({"name": "decoy", "path": real.join(&victim_name).display().to_string()}),
        )
        .await;
    let before = snapshot(&workspace);
    let swap = daemon.data.join("swap");
    std::os::unix::fs::symlink(&real, &swap).unwrap();
    let stop = Arc::new(AtomicBool::new(false));
    let swapper = {
        let stop = stop.clone();
        let (swap, real, inner) = (swap.clone(), real.clone(), victim.parent().unwrap().to_owned());
        std::thread::spawn(move || {
            let staging = swap.with_extension("next");
            let mut toward_workspace = false;
            while !stop.load(Ordering::Relaxed) {
                toward_workspace = !toward_workspace;
                let _ = std::fs::remove_file(&staging);
                std::os::unix::fs::symlink(if toward_workspace { &inner } else { &real }, &staging).unwrap();
                // rename() replaces the link atomically (POSIX), so `swap` always exists.
                std::fs::rename(&staging, &swap).unwrap();
                std::thread::sleep(Duration::from_micros(200));
            }
        })
    };
    let rounds = counts::rounds(100, 1000);
    let path = format!("swap/{}", victim_name.to_string_lossy());
    let (mut failed, mut landed, mut refused) = (0, 0, 0);
    for round in 0..rounds {
        let result = if round % 2 == 0 {
            daemon
                .client
                .call(
                    "dataset.export",
                    json!({"name": "src", "path": path, "overwrite": true}),
                )
                .await
        } else {
            let imported = daemon
                .client
                .call(
                    "dataset.import",
                    json!({"name": "raced", "path": path, "overwrite": true}),
                )
                .await;
            if imported.is_ok() {
                let info = daemon.call("dataset.info", json!({"name": "raced"})).await;
                let columns = info["columns"].to_string();
                if !columns.contains("decoy") && !columns.contains("\"who\"") {
                    eprintln!("round {round}: an import read something else: {columns}");
                    failed += 1;
                }
            }
            imported
        };
        match code_of(&result) {
            None => landed += 1,
            Some(4006) | Some(4008) => refused += 1,
            other => {
                eprintln!("round {round}: unexpected answer {other:?}: {result:?}");
                failed += 1;
            }
        }
    }
    stop.store(true, Ordering::Relaxed);
    swapper.join().unwrap();
    let lost = lost_files(&before, &workspace);
    eprintln!("symlink race: {landed} calls went to the real directory, {refused} were refused");
    counts::report("symlink race on imports and exports", rounds, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}

#[tokio::test(flavor = "multi_thread")]
async fn exports_replace_a_file_only_when_asked_and_never_show_half_a_file() {
    let daemon = TestDaemon::start().await;
    store_two(&daemon).await;
    let target = daemon.data.join("out.parquet");
    let first = daemon
        .call("dataset.export", json!({"name": "victim", "path": "out.parquet"}))
        .await;
    assert_eq!(first["rows"], 3);
    let written = std::fs::read(&target).unwrap();
    let mut tried = 1;
    let mut failed = 0;
    // Without overwrite an existing file stays as it is, and the error names the parameter.
    match daemon
        .client
        .call("dataset.export", json!({"name": "src", "path": "out.parquet"}))
        .await
    {
        Err(ClientError::Rpc {
            code: 4008,
            message,
            data,
        }) => {
            assert!(message.contains("exists already"), "{message}");
            assert_eq!(data.unwrap()["param"], "overwrite");
        }
        other => panic!("an export over an existing file was not refused: {other:?}"),
    }
    tried += 1;
    if std::fs::read(&target).unwrap() != written {
        failed += 1;
    }
    daemon
        .call(
            "dataset.export",
            json!({"name": "src", "path": "out.parquet", "overwrite": true}),
        )
        .await;
    tried += 1;
    let reimported = daemon
        .call("dataset.import", json!({"name": "back", "path": "out.parquet"}))
        .await;
    assert_eq!(reimported["rows"], 3);
    let rows = daemon.call("dataset.rows", json!({"name": "back"})).await;
    assert_eq!(rows["columns"]["who"][0], "src");
    // The command line: refused without --overwrite, with the option named; replaced with it.
    let cli_target = daemon.data.join("cli.csv");
    let cli_path = cli_target.to_str().unwrap();
    let url = daemon.daemon.url().to_owned();
    let first = run_cli(&url, "never", &["export", "src", cli_path]);
    let again = run_cli(&url, "never", &["export", "victim", cli_path]);
    let forced = run_cli(&url, "never", &["export", "victim", cli_path, "--overwrite"]);
    tried += 3;
    if !first.success || again.success || !again.stderr.contains("--overwrite") || !forced.success {
        eprintln!(
            "mobilis export: first {} / again {} {} / forced {} {}",
            first.success, again.success, again.stderr, forced.success, forced.stderr
        );
        failed += 1;
    }
    if !std::fs::read_to_string(&cli_target).unwrap().contains("victim") {
        failed += 1;
    }
    // Racing exports of one new name: exactly one wins, the others are refused.
    let racers = counts::rounds(8, 32);
    let calls: Vec<_> = (0..racers)
        .map(|index| {
            let url = daemon.daemon.url().to_owned();
            let name = if index % 2 == 0 { "src" } else { "victim" };
            async move {
                // A connection each, so that the calls arrive together.
                let client = Client::connect(&url, None).await.unwrap();
                client
                    .call("dataset.export", json!({"name": name, "path": "raced.csv"}))
                    .await
            }
        })
        .collect();
    let results = futures_join_all(calls).await;
    let winners = results.iter().filter(|r| r.is_ok()).count();
    tried += racers;
    if winners != 1 {
        eprintln!("{winners} of {racers} racing exports claim to have written raced.csv");
        failed += 1;
    }
    // No temporary file is left behind.
    let leftovers: Vec<String> = std::fs::read_dir(&daemon.data)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|name| name.starts_with('.'))
        .collect();
    if !leftovers.is_empty() {
        eprintln!("temporary files left: {leftovers:?}");
        failed += 1;
    }
    counts::report("export overwrite and atomic placement", tried, failed, 0);
    assert_eq!(failed, 0);
}

/// Awaits every future (the tests crate has no futures dependency).
async fn futures_join_all<F>(futures: Vec<F>) -> Vec<F::Output>
where
    F: std::future::Future + Send + 'static,
    F::Output: Send + 'static,
{
    let mut handles = Vec::new();
    let mut outputs = Vec::new();
    for future in futures {
        handles.push(tokio::spawn(future));
    }
    for handle in handles {
        outputs.push(handle.await.unwrap());
    }
    outputs
}

/// Waits until the call under `call_id` is no longer running; returns how long that took.
async fn until_stopped(daemon: &TestDaemon, call_id: &str, limit: Duration) -> Option<Duration> {
    let started = Instant::now();
    while started.elapsed() < limit {
        let progress = daemon.call("analysis.progress", json!({"call_id": call_id})).await;
        if progress["running"] == false {
            return Some(started.elapsed());
        }
        tokio::time::sleep(Duration::from_millis(20)).await;
    }
    None
}

/// Waits until the call under `call_id` runs.
async fn until_running(daemon: &TestDaemon, call_id: &str) {
    let started = Instant::now();
    loop {
        let progress = daemon.call("analysis.progress", json!({"call_id": call_id})).await;
        if progress["running"] == true {
            return;
        }
        assert!(started.elapsed() < Duration::from_secs(30), "{call_id} never started");
        tokio::time::sleep(Duration::from_millis(20)).await;
    }
}

async fn start_with_fixture() -> (TestDaemon, tempfile::TempDir) {
    let plugins = fixture_plugin_dir();
    let dir = plugins.path().to_owned();
    let daemon = TestDaemon::start_with(move |options| options.plugin_dirs.push(dir)).await;
    (daemon, plugins)
}

fn wait_request(call_id: &str, output: &str, seconds: f64) -> Value {
    json!({"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": seconds}, "output": output, "call_id": call_id})
}

#[tokio::test(flavor = "multi_thread")]
async fn a_call_whose_client_went_away_stops() {
    use tokio::io::AsyncWriteExt;
    let (daemon, _plugins) = start_with_fixture().await;
    let rounds = counts::rounds(2, 10);
    let mut tried = 0;
    let mut failed = 0;
    let mut lost = 0;
    let address = daemon.daemon.url().trim_start_matches("http://").to_owned();
    for round in 0..rounds {
        // Over HTTP: a request on a raw connection that is then closed.
        let call_id = format!("http-{round}");
        let body = json!({"jsonrpc": "2.0", "id": 1, "method": "analysis.run", "params": wait_request(&call_id, &call_id, 60.0)}).to_string();
        let mut stream = tokio::net::TcpStream::connect(&address).await.unwrap();
        let request = format!(
            "POST / HTTP/1.1\r\nHost: {address}\r\nContent-Type: application/json\r\nContent-Length: {}\r\n\r\n{body}",
            body.len()
        );
        stream.write_all(request.as_bytes()).await.unwrap();
        until_running(&daemon, &call_id).await;
        drop(stream);
        tried += 1;
        match until_stopped(&daemon, &call_id, Duration::from_secs(30)).await {
            Some(took) => eprintln!("HTTP client gone: the call stopped after {} ms", took.as_millis()),
            None => failed += 1,
        }
        // Over WebSocket: a client that drops its call and its connection.
        let call_id = format!("ws-{round}");
        let client = Client::connect(daemon.daemon.url(), None).await.unwrap();
        let request = wait_request(&call_id, &call_id, 60.0);
        let call = tokio::spawn(async move {
            let _ = client.call("analysis.run", request).await;
        });
        until_running(&daemon, &call_id).await;
        call.abort();
        let _ = call.await;
        tried += 1;
        match until_stopped(&daemon, &call_id, Duration::from_secs(30)).await {
            Some(took) => eprintln!("WebSocket client gone: the call stopped after {} ms", took.as_millis()),
            None => failed += 1,
        }
        // Neither stored an output.
        for output in [format!("http-{round}"), call_id] {
            if daemon
                .client
                .call("dataset.info", json!({"name": output}))
                .await
                .is_ok()
            {
                lost += 1;
            }
        }
    }
    counts::report("calls of clients that went away", tried, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}

#[tokio::test(flavor = "multi_thread")]
async fn a_call_past_its_deadline_is_answered_5005_and_stores_nothing() {
    let (daemon, _plugins) = start_with_fixture().await;
    let mut tried = 0;
    let mut failed = 0;
    let mut lost = 0;
    let mut request = wait_request("late", "late", 60.0);
    request["deadline_s"] = json!(0.5);
    let started = Instant::now();
    let result = daemon.client.call("analysis.run", request).await;
    let took = started.elapsed();
    tried += 1;
    match &result {
        Err(ClientError::Rpc {
            code: 5005,
            message,
            data,
        }) => {
            assert!(message.contains("deadline"), "{message}");
            assert_eq!(data.as_ref().unwrap()["param"], "deadline_s");
        }
        other => {
            eprintln!("analysis.run past its deadline answered {other:?}");
            failed += 1;
        }
    }
    // The answer came at the deadline, not when the 60 s wait would have ended, and the
    // analysis itself was stopped.
    if took > Duration::from_secs(30) || until_stopped(&daemon, "late", Duration::from_secs(30)).await.is_none() {
        failed += 1;
    }
    eprintln!("deadline_s 0.5: answered after {} ms", took.as_millis());
    if daemon
        .client
        .call("dataset.info", json!({"name": "late"}))
        .await
        .is_ok()
    {
        lost += 1;
    }
    // A pipeline: the step that finished keeps its output, the one cut short stores nothing.
    let result = daemon
        .client
        .call(
            "pipeline.run",
            json!({"steps": [
                {"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": 0.05}, "output": "quick"},
                {"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": 60}, "output": "slow"}
            ], "deadline_s": 1.5}),
        )
        .await;
    tried += 1;
    if code_of(&result) != Some(5005) {
        eprintln!("pipeline.run past its deadline answered {result:?}");
        failed += 1;
    }
    tokio::time::sleep(Duration::from_millis(300)).await;
    if daemon
        .client
        .call("dataset.info", json!({"name": "slow"}))
        .await
        .is_ok()
    {
        lost += 1;
    }
    daemon.call("dataset.info", json!({"name": "quick"})).await;
    // A deadline out of range, and one inside a pipeline step, are refused with the rule.
    for (method, params) in [
        (
            "analysis.run",
            json!({"analysis": "fixture.wait", "inputs": {}, "output": "x", "deadline_s": 0}),
        ),
        (
            "analysis.run",
            json!({"analysis": "fixture.wait", "inputs": {}, "output": "x", "deadline_s": 100000}),
        ),
        ("plot.render", json!({"dataset": "quick", "deadline_s": "soon"})),
        (
            "pipeline.run",
            json!({"steps": [{"analysis": "fixture.wait", "inputs": {}, "output": "x", "deadline_s": 5}]}),
        ),
    ] {
        tried += 1;
        let (code, message) = daemon.call_error(method, params).await;
        if code != 4001 || !message.contains("deadline_s") {
            eprintln!("{method}: {code} {message}");
            failed += 1;
        }
    }
    // A generous deadline changes nothing.
    let mut request = wait_request("in-time", "in-time", 0.05);
    request["deadline_s"] = json!(60);
    daemon.call("analysis.run", request).await;
    tried += 1;
    counts::report("deadlines", tried, failed, lost);
    assert_eq!((failed, lost), (0, 0));
}

#[tokio::test(flavor = "multi_thread")]
async fn a_figure_of_too_many_series_is_refused_at_once_naming_the_filter() {
    use polars::prelude::*;
    let daemon = TestDaemon::start().await;
    // A million readings: 1000 samples x 1000 fields.
    let rows = 1_000_000usize;
    let sample: Vec<String> = (0..rows).map(|i| format!("S{}", i % 1000)).collect();
    let field: Vec<f64> = (0..rows).map(|i| (i / 1000) as f64 * 1e-3).collect();
    let resistance: Vec<f64> = (0..rows).map(|i| 100.0 + (i % 977) as f64).collect();
    let mut frame = df!("sample" => sample, "field_T" => field, "resistance_ohm" => resistance).unwrap();
    let file = std::fs::File::create(daemon.data.join("million.parquet")).unwrap();
    ParquetWriter::new(file).finish(&mut frame).unwrap();
    daemon
        .call("dataset.import", json!({"name": "million", "path": "million.parquet"}))
        .await;
    let started = Instant::now();
    let result = daemon
        .client
        .call(
            "plot.render",
            json!({"dataset": "million", "kind": "columns", "x": "field_T", "y": ["resistance_ohm"], "format": "svg"}),
        )
        .await;
    let took = started.elapsed();
    let mut failed = 0;
    match &result {
        Err(ClientError::Rpc {
            code: 4009,
            message,
            data,
        }) => {
            assert!(message.contains("filter") && message.contains("series_by"), "{message}");
            assert_eq!(data.as_ref().unwrap()["param"], "filter");
        }
        other => {
            eprintln!("plot.render of a million rows in 1000 series answered {other:?}");
            failed += 1;
        }
    }
    eprintln!(
        "plot.render refusal of 1e6 rows in 1000 series: {} ms",
        took.as_millis()
    );
    // With the filter it names, the figure is drawn.
    let started = Instant::now();
    let figure = daemon
        .call(
            "plot.render",
            json!({"dataset": "million", "kind": "columns", "x": "field_T", "y": ["resistance_ohm"], "filter": {"sample": "S7"}, "format": "svg"}),
        )
        .await;
    assert!(figure["svg"].as_str().unwrap().starts_with("<svg"));
    eprintln!(
        "plot.render of one sample's 1000 rows of the million: {} ms",
        started.elapsed().as_millis()
    );
    counts::report("figure limits", 2, failed, 0);
    assert_eq!(failed, 0);
}
