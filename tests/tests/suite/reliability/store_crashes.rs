//! Crash safety of the dataset store: kill -9 during imports, overwrites, drops and pipelines.
//!
//! Every round starts the real daemon on the same workspace, lets clients import, overwrite,
//! drop, run analyses with `summary_output` and run pipelines, kills the daemon with SIGKILL
//! at a random moment, and starts it again. Each dataset must then be the version last
//! acknowledged or the one whose call was in flight, whole, and with its own provenance:
//! the source file (or the analysis factor) recorded in its manifest must match its rows.
//! An analysis's output and its summary must be of the same run. No temporary file may be
//! left and nothing may be reported as damaged.
//!
//! `MOBILIS_CRASH_SEED=<n>` repeats a round sequence; the seed is printed on every run.

use super::counts;
use mobilis_client::Client;
use mobilis_tests::{fixture_plugin_dir, TestDaemon};
use serde_json::{json, Value};
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::{Arc, Mutex};
use std::time::Duration;

/// Rows of the source file of version `k`; distinct per version, so rows alone name it.
fn rows_of_version(k: u64) -> usize {
    4_000 + 1_000 * k as usize
}

const BASE_ROWS: usize = 6_000;
const VERSIONS: u64 = 8;
/// Names of imported datasets, two per importing client: one client per name, so that the
/// calls on a name are in the order the ledger records them.
const IMPORTED: [[&str; 2]; 2] = [["imp-0", "imp-1"], ["imp-2", "imp-3"]];
const ANALYSED: [&str; 2] = ["out-0", "out-1"];

/// SplitMix64 (Steele, Lea, Flood: "Fast splittable pseudorandom number generators",
/// OOPSLA 2014): small, seedable, and good enough to pick moments and versions.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

/// What the clients know of one dataset name: the state last acknowledged, and the state
/// a call in flight when the daemon died would have left. `None` means "absent".
#[derive(Clone, Debug, Default)]
struct Known {
    acknowledged: Option<u64>,
    in_flight: Option<Option<u64>>,
}

type Ledger = Arc<Mutex<BTreeMap<String, Known>>>;

/// Calls answered in all rounds, so that a run shows the clients did write between kills.
static ANSWERED: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

fn write_sources(data: &Path) {
    let mut base = String::from("x\n");
    for i in 0..BASE_ROWS {
        base.push_str(&format!("{i}.5\n"));
    }
    std::fs::write(data.join("base.csv"), base).unwrap();
    for k in 1..=VERSIONS {
        let mut text = String::from("x,version\n");
        for i in 0..rows_of_version(k) {
            text.push_str(&format!("{i}.25,{k}\n"));
        }
        std::fs::write(data.join(format!("src-{k}.csv")), text).unwrap();
    }
}

fn begin(ledger: &Ledger, names: &[&str], next: Option<u64>) {
    let mut ledger = ledger.lock().unwrap();
    for name in names {
        ledger.entry((*name).to_owned()).or_default().in_flight = Some(next);
    }
}

/// Records a call's outcome; false when the daemon is gone (the call stays in flight).
fn settle(ledger: &Ledger, names: &[&str], outcome: &Result<Value, mobilis_client::ClientError>) -> bool {
    let mut ledger = ledger.lock().unwrap();
    for name in names {
        let known = ledger.get_mut(*name).expect("begun");
        match outcome {
            Ok(_) => {
                ANSWERED.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                known.acknowledged = known.in_flight.take().expect("in flight");
            }
            // Refused by the daemon: nothing changed.
            Err(mobilis_client::ClientError::Rpc { .. }) => known.in_flight = None,
            Err(_) => return false,
        }
    }
    !matches!(outcome, Err(e) if e.code().is_none())
}

/// Imports, overwrites and drops of the imported names, until the daemon dies.
async fn importer(client: Client, names: [&'static str; 2], ledger: Ledger, mut rng: Rng) {
    loop {
        let name = names[rng.below(2) as usize];
        let present = ledger.lock().unwrap().get(name).and_then(|k| k.acknowledged).is_some();
        let outcome = if present && rng.below(4) == 0 {
            begin(&ledger, &[name], None);
            client.call("dataset.drop", json!({"name": name})).await
        } else {
            let k = 1 + rng.below(VERSIONS);
            begin(&ledger, &[name], Some(k));
            client
                .call(
                    "dataset.import",
                    json!({"name": name, "path": format!("src-{k}.csv"), "overwrite": true}),
                )
                .await
        };
        if !settle(&ledger, &[name], &outcome) {
            return;
        }
    }
}

/// Analyses with a summary table, and two-step pipelines, until the daemon dies.
async fn analyser(client: Client, ledger: Ledger, mut rng: Rng) {
    loop {
        let k = 1 + rng.below(VERSIONS);
        let outcome;
        let names: Vec<String>;
        if rng.below(3) == 0 {
            names = vec!["pipe-a".into(), "pipe-b".into(), "pipe-b.sum".into()];
            let refs: Vec<&str> = names.iter().map(String::as_str).collect();
            begin(&ledger, &refs, Some(k));
            outcome = client
                .call(
                    "pipeline.run",
                    json!({"steps": [
                        {"analysis": "fixture.scale", "inputs": {"values": "base"}, "params": {"factor": k},
                         "output": "pipe-a", "overwrite": true},
                        {"analysis": "fixture.scale", "inputs": {"values": "base"}, "params": {"factor": k},
                         "output": "pipe-b", "summary_output": "pipe-b.sum", "overwrite": true},
                    ]}),
                )
                .await;
        } else {
            let output = ANALYSED[rng.below(ANALYSED.len() as u64) as usize];
            names = vec![output.into(), format!("{output}.sum")];
            let refs: Vec<&str> = names.iter().map(String::as_str).collect();
            begin(&ledger, &refs, Some(k));
            outcome = client
                .call(
                    "analysis.run",
                    json!({"analysis": "fixture.scale", "inputs": {"values": "base"}, "params": {"factor": k},
                           "output": output, "summary_output": format!("{output}.sum"), "overwrite": true}),
                )
                .await;
        }
        let refs: Vec<&str> = names.iter().map(String::as_str).collect();
        if !settle(&ledger, &refs, &outcome) {
            return;
        }
    }
}

/// The version a stored dataset holds, read from its provenance, after checking that its
/// rows agree with that provenance. Err describes a dataset that is not whole or not its own.
async fn stored_version(daemon: &TestDaemon, name: &str) -> Result<Option<u64>, String> {
    let info = match daemon.client.call("dataset.info", json!({"name": name})).await {
        Ok(info) => info,
        Err(e) if e.code() == Some(4002) => return Ok(None),
        Err(e) => return Err(format!("dataset.info {name}: {e}")),
    };
    let rows = info["rows"].as_u64().unwrap_or(0) as usize;
    let provenance = &info["provenance"];
    let page = |offset: usize| {
        daemon
            .client
            .call("dataset.rows", json!({"name": name, "offset": offset, "limit": 3}))
    };
    let first = page(0).await.map_err(|e| format!("{name}: rows unreadable: {e}"))?;
    let last = page(rows.saturating_sub(3))
        .await
        .map_err(|e| format!("{name}: rows unreadable: {e}"))?;
    let column = |page: &Value, column: &str| -> Vec<f64> {
        page["columns"][column]
            .as_array()
            .map(|values| values.iter().filter_map(Value::as_f64).collect())
            .unwrap_or_default()
    };
    let base_x = |i: usize| i as f64 + 0.5;
    if name.starts_with("imp-") {
        let path = provenance["path"].as_str().unwrap_or_default();
        let k: u64 = path
            .rsplit('/')
            .next()
            .and_then(|f| f.strip_prefix("src-"))
            .and_then(|f| f.strip_suffix(".csv"))
            .and_then(|k| k.parse().ok())
            .ok_or_else(|| format!("{name}: provenance names no source version: {provenance}"))?;
        let versions: Vec<f64> = [column(&first, "version"), column(&last, "version")].concat();
        let xs_last = column(&last, "x");
        let whole = rows == rows_of_version(k)
            && versions.len() == 6
            && versions.iter().all(|v| *v == k as f64)
            && xs_last.last() == Some(&((rows - 1) as f64 + 0.25));
        return whole.then_some(Some(k)).ok_or_else(|| {
            format!("{name}: provenance says src-{k}.csv, the table has {rows} rows, versions {versions:?}")
        });
    }
    let k = provenance["params"]["factor"]
        .as_u64()
        .ok_or_else(|| format!("{name}: provenance names no factor: {provenance}"))?;
    if name.ends_with(".sum") {
        let expected: f64 = (0..BASE_ROWS).map(|i| base_x(i) * k as f64).sum();
        let sum = column(&first, "sum");
        let whole = rows == 1 && sum.len() == 1 && (sum[0] - expected).abs() <= 1e-9 * expected;
        return whole
            .then_some(Some(k))
            .ok_or_else(|| format!("{name}: factor {k} but the summary holds {sum:?} in {rows} rows"));
    }
    let scaled_first = column(&first, "x_scaled");
    let scaled_last = column(&last, "x_scaled");
    let whole = rows == BASE_ROWS
        && scaled_first.first() == Some(&(base_x(0) * k as f64))
        && scaled_last.last() == Some(&(base_x(BASE_ROWS - 1) * k as f64));
    whole
        .then_some(Some(k))
        .ok_or_else(|| format!("{name}: factor {k} but rows {rows}, x_scaled {scaled_first:?} .. {scaled_last:?}"))
}

/// Checks every known name after a restart and settles the ledger on what was found.
/// Returns (problems, lost): lost counts acknowledged datasets gone or reverted.
async fn audit(daemon: &TestDaemon, ledger: &Ledger) -> (Vec<String>, usize) {
    let mut problems = Vec::new();
    let mut lost = 0;
    let info = daemon.call("server.info", json!({})).await;
    if info["damaged_files"].as_array().is_some_and(|d| !d.is_empty()) {
        problems.push(format!("damage reported: {}", info["damaged_files"]));
    }
    let directory = daemon.workspace.join("datasets");
    let leftovers: Vec<String> = std::fs::read_dir(&directory)
        .unwrap()
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.'))
        .collect();
    if !leftovers.is_empty() {
        problems.push(format!("left over after the start: {leftovers:?}"));
    }
    let names: Vec<String> = ledger.lock().unwrap().keys().cloned().collect();
    let mut found = BTreeMap::new();
    for name in &names {
        let known = ledger.lock().unwrap()[name].clone();
        match stored_version(daemon, name).await {
            Ok(state) => {
                let allowed = state == known.acknowledged || Some(state) == known.in_flight;
                if !allowed {
                    problems.push(format!(
                        "{name}: holds {state:?}, acknowledged {:?}, in flight {:?}",
                        known.acknowledged, known.in_flight
                    ));
                    if known.acknowledged.is_some() {
                        lost += 1;
                    }
                }
                found.insert(name.clone(), state);
                let mut ledger = ledger.lock().unwrap();
                let entry = ledger.get_mut(name).unwrap();
                entry.acknowledged = state;
                entry.in_flight = None;
            }
            Err(problem) => {
                problems.push(problem);
                lost += usize::from(known.acknowledged.is_some());
            }
        }
    }
    // An analysis's output and its summary are of one run, or both absent.
    for output in ["out-0", "out-1", "pipe-b"] {
        let (a, b) = (found.get(output), found.get(&format!("{output}.sum")));
        if a != b {
            problems.push(format!("{output} is {a:?} but its summary is {b:?}"));
        }
    }
    (problems, lost)
}

async fn kill_rounds(rounds: usize) {
    let seed = std::env::var("MOBILIS_CRASH_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| {
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map(|d| d.as_nanos() as u64)
                .unwrap_or(7)
        });
    println!("store crash rounds: seed {seed} (MOBILIS_CRASH_SEED={seed} repeats them)");
    let mut rng = Rng(seed);
    let plugins = fixture_plugin_dir();
    let plugin_dir = plugins.path().to_owned();
    let mut daemon = TestDaemon::start_with(|options| options.plugin_dirs = vec![plugin_dir]).await;
    write_sources(&daemon.data);
    daemon
        .call("dataset.import", json!({"name": "base", "path": "base.csv"}))
        .await;
    let ledger: Ledger = Arc::default();
    let (mut failed, mut lost, mut killed_in_flight) = (0, 0, 0);
    let started = std::time::Instant::now();
    for round in 0..rounds {
        let url = daemon.daemon.url().to_owned();
        let workers = vec![
            tokio::spawn(importer(
                Client::connect(&url, None).await.unwrap(),
                IMPORTED[0],
                ledger.clone(),
                Rng(rng.next()),
            )),
            tokio::spawn(importer(
                Client::connect(&url, None).await.unwrap(),
                IMPORTED[1],
                ledger.clone(),
                Rng(rng.next()),
            )),
            tokio::spawn(analyser(
                Client::connect(&url, None).await.unwrap(),
                ledger.clone(),
                Rng(rng.next()),
            )),
        ];
        // A random moment: early rounds of a write, mid-fsync, between renames, or idle.
        tokio::time::sleep(Duration::from_millis(30 + rng.below(700))).await;
        daemon = daemon.restart().await;
        for worker in workers {
            let _ = tokio::time::timeout(Duration::from_secs(30), worker).await;
        }
        killed_in_flight += ledger
            .lock()
            .unwrap()
            .values()
            .filter(|k| k.in_flight.is_some())
            .count();
        let (problems, round_lost) = audit(&daemon, &ledger).await;
        if !problems.is_empty() {
            failed += 1;
            eprintln!("round {round} (seed {seed}): {}", problems.join("; "));
        }
        lost += round_lost;
    }
    let base = daemon.call("dataset.info", json!({"name": "base"})).await;
    assert_eq!(base["rows"], BASE_ROWS, "the dataset nobody wrote to changed");
    counts::report("store kill -9 rounds", rounds, failed, lost);
    println!(
        "store crash rounds: {rounds} in {:.1} s, {} dataset writes acknowledged, {killed_in_flight} writes cut by a kill (seed {seed})",
        started.elapsed().as_secs_f64(),
        ANSWERED.load(std::sync::atomic::Ordering::Relaxed)
    );
    assert_eq!((failed, lost), (0, 0), "seed {seed}: see the rounds above");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn killed_daemons_keep_every_dataset_whole_with_its_own_provenance() {
    kill_rounds(counts::rounds(12, 200)).await;
}

/// The daemon's resident anonymous memory in bytes (`RssAnon` in `/proc/<pid>/status`,
/// proc(5)): its heap and stacks, without the pages of code it first ran during the check,
/// which a debug build has many of and which say nothing about tables kept or returned.
fn resident_bytes(pid: u32) -> u64 {
    let status = std::fs::read_to_string(format!("/proc/{pid}/status")).unwrap_or_default();
    status
        .lines()
        .find_map(|line| line.strip_prefix("RssAnon:"))
        .and_then(|rest| rest.split_whitespace().next())
        .and_then(|kib| kib.parse::<u64>().ok())
        .map_or(0, |kib| kib * 1024)
}

#[cfg(target_os = "linux")]
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn memory_comes_back_after_a_large_dataset_is_dropped() {
    let daemon = TestDaemon::start().await;
    let rows = 1_000_000;
    // Parquet rather than CSV: a debug build parses a million CSV lines slowly, and the
    // check is about what the store keeps, not about the reader.
    let mut frame = polars::df!(
        "temperature_K" => (0..rows).map(|i| (i % 400) as f64 + 0.5).collect::<Vec<_>>(),
        "resistance_ohm" => (0..rows).map(|i| i as f64 + 0.25).collect::<Vec<_>>()
    )
    .unwrap();
    polars::prelude::ParquetWriter::new(std::fs::File::create(daemon.data.join("large.parquet")).unwrap())
        .finish(&mut frame)
        .unwrap();
    drop(frame);
    let pid = daemon.daemon.pid();
    let before = resident_bytes(pid);
    let (mut tried, mut failed) = (0, 0);
    let mut figures = Vec::new();
    // Import-and-drop cycles: memory that stayed after each drop would add up.
    for cycle in 0..counts::rounds(2, 5) {
        tried += 1;
        daemon
            .call("dataset.import", json!({"name": "large", "path": "large.parquet"}))
            .await;
        let loaded = resident_bytes(pid);
        let stored = daemon.call("server.info", json!({})).await["memory"]["stored_bytes"]
            .as_u64()
            .unwrap_or(0);
        daemon.call("dataset.drop", json!({"name": "large"})).await;
        // The process gives back at least half of what the import added. A call still
        // reading the table when the drop answers frees it (and trims) as it lets go, so
        // the memory may come back a moment after the answer: wait up to two seconds.
        let enough = |resident: u64| resident <= before + (loaded.saturating_sub(before)) / 2;
        let mut dropped = resident_bytes(pid);
        for _ in 0..20 {
            if enough(dropped) {
                break;
            }
            tokio::time::sleep(std::time::Duration::from_millis(100)).await;
            dropped = resident_bytes(pid);
        }
        let after = daemon.call("server.info", json!({})).await["memory"].clone();
        figures.push(format!(
            "cycle {cycle}: anonymous RSS {} MiB before, {} MiB with 1e6 rows ({} MiB stored), {} MiB after the drop",
            before >> 20,
            loaded >> 20,
            stored >> 20,
            dropped >> 20
        ));
        // The table's bytes leave the budget's account, and the memory came back.
        if after["stored_bytes"] != 0 || stored < 8 << 20 || !enough(dropped) {
            failed += 1;
        }
    }
    for line in &figures {
        println!("memory after drops: {line}");
    }
    counts::report("memory returned after drops", tried, failed, 0);
    assert_eq!(failed, 0, "{figures:#?}");
}

// A table replaced again and again below the size from which the store trims the allocator
// (an analysis writing its output anew, say) leaves its memory to the allocator, which
// serves the next write from it: the resident memory settles instead of growing.
#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn replacing_a_small_table_again_and_again_does_not_grow_memory() {
    let daemon = TestDaemon::start().await;
    let values: Vec<f64> = (0..50_000).map(|i| f64::from(i) * 0.5).collect();
    let table = json!({"name": "again", "columns": {"x": values}, "overwrite": true});
    let pid = daemon.daemon.pid();
    let mut resident = Vec::new();
    for _ in 0..10 {
        daemon.call("dataset.import", table.clone()).await;
        resident.push(resident_bytes(pid) >> 20);
    }
    let settled = resident[3];
    let last = *resident.last().expect("ten imports");
    println!("memory while replacing a table: anonymous RSS {resident:?} MiB");
    assert!(last <= settled + 16, "resident memory grew: {resident:?} MiB");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn imports_past_the_memory_budget_are_refused_with_what_to_do() {
    let daemon = TestDaemon::start_with(|options| {
        options
            .extra_arguments
            .extend(["--memory-budget".into(), "64KiB".into()])
    })
    .await;
    let info = daemon.call("server.info", json!({})).await;
    assert_eq!(info["memory"]["budget_bytes"], 64 * 1024, "{info}");
    let small = json!({"name": "small", "columns": {"x": [1.0, 2.0, 3.0]}});
    daemon.call("dataset.import", small).await;
    let values: Vec<f64> = (0..20_000).map(f64::from).collect();
    let (code, message) = daemon
        .call_error("dataset.import", json!({"name": "big", "columns": {"x": values}}))
        .await;
    let refused = code == 4009 && message.contains("memory budget") && message.contains("64.00 KiB");
    counts::report("imports past the memory budget", 1, usize::from(!refused), 0);
    assert!(refused, "{code} {message}");
    // The refusal changed nothing, and what fits is still stored.
    daemon.call("dataset.info", json!({"name": "small"})).await;
    let (code, _) = daemon.call_error("dataset.info", json!({"name": "big"})).await;
    assert_eq!(code, 4002);
}
