//! The daemon's own costs, end to end through a release `mobilisd`: importing a million
//! readings from CSV and from Parquet, `analysis.run hall.reduce` on them with the output
//! stored, round trips of cheap calls over HTTP keep-alive and WebSocket, a page of 10,000
//! rows (each timed with a lean client that leaves the answer unparsed, the figure the goal
//! is for, and with an application's client, to show the client's own share), and ten
//! million readings imported (with progress) and reduced, with the daemon's peak memory
//! against the size of the data.
//!
//! Run it with
//!
//! ```text
//! cargo bench -p mobilis-tests --bench daemon
//! ```
//!
//! It builds the release daemon and the hall plugin first (`cargo build --release -p
//! mobilis-rpc -p mobilis-plugin-hall`), generates the readings of
//! [`mobilis_tests::hall_readings`] (100 samples x 625 temperatures x 16 readings, and 1000
//! samples for the ten million), writes them into a data root as CSV and Parquet files,
//! and starts the daemon on a fresh workspace with its log (`MOBILIS_LOG` at debug for the
//! service and the store) in a file, from which the pieces of each `analysis.run` are read:
//! fetching the inputs, the plugin call, and storing the output (Parquet write, fsync,
//! commit). Every figure is a median over several calls after an untimed warm-up one, and
//! is printed beside its goal. Nothing asserts on time.
//!
//! `MOBILIS_BENCH_DAEMON=/path/to/mobilisd` measures another daemon (the hall plugin beside
//! it) instead of building one, for example an earlier version to compare with.
//! `MOBILIS_BENCH_SKIP_10M=1` leaves out the ten million readings (a minute or more of
//! generation on a small machine, and a few GB of memory).

use mobilis_client::{Client, ProgressEvent};
use mobilis_tests::bench::{self, fail, format_seconds, Timing};
use mobilis_tests::hall_readings::{self, READINGS_PER_TEMPERATURE, SETPOINT_COUNT};
use mobilis_tests::load::http_keep_alive::Connection;
use mobilis_tests::load::raw_wire;
use polars::prelude::*;
use serde_json::{json, Value};
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::Instant;

const BENCH: &str = "daemon";

const IMPORT_CSV_GOAL_S: f64 = 1.0;
const IMPORT_PARQUET_GOAL_S: f64 = 0.2;
const RUN_GOAL_S: f64 = 0.08;
const SERVER_INFO_HTTP_GOAL_S: f64 = 200e-6;
const SERVER_INFO_WS_GOAL_S: f64 = 100e-6;
const ROWS_GOAL_S: f64 = 0.01;
/// Peak RSS of the daemon over the raw data size, at ten million readings.
const PEAK_OVER_RAW_GOAL: f64 = 3.0;

/// Timed calls per figure (odd, so that the median is one measured call).
const IMPORT_REPETITIONS: usize = 5;
const RUN_REPETITIONS: usize = 7;
const ROUND_TRIPS: usize = 2001;
const ROWS_REPETITIONS: usize = 21;
const ROWS_PAGE: usize = 10_000;

/// A release daemon started by the bench, its log going to a file.
struct BenchDaemon {
    child: Child,
    url: String,
    log: PathBuf,
}

impl BenchDaemon {
    fn start(binary: &Path, workspace: &Path, data_root: &Path, log: PathBuf) -> BenchDaemon {
        let log_file = std::fs::File::create(&log)
            .unwrap_or_else(|error| fail(BENCH, &format!("cannot create {}: {error}", log.display())));
        let mut child = Command::new(binary)
            .args(["--listen", "127.0.0.1:0", "--memory-budget", "32GiB"])
            .arg("--workspace")
            .arg(workspace)
            .arg("--data-root")
            .arg(data_root)
            .current_dir(data_root)
            .env(
                "MOBILIS_LOG",
                "info,mobilis_rpc::service=debug,mobilis_rpc::store=debug",
            )
            .stdin(Stdio::null())
            .stdout(Stdio::piped())
            .stderr(Stdio::from(log_file))
            .spawn()
            .unwrap_or_else(|error| fail(BENCH, &format!("cannot start {}: {error}", binary.display())));
        let mut line = String::new();
        let stdout = child.stdout.take().expect("stdout is piped");
        let _ = BufReader::new(stdout).read_line(&mut line);
        let Some(url) = line.trim().strip_prefix("listening on ").map(str::to_owned) else {
            let _ = child.kill();
            fail(
                BENCH,
                &format!("mobilisd did not start; its log is in {}", log.display()),
            );
        };
        BenchDaemon { child, url, log }
    }

    /// `VmHWM` of the daemon's `/proc` status, KiB.
    fn peak_rss_kib(&self) -> Option<u64> {
        let status = std::fs::read_to_string(format!("/proc/{}/status", self.child.id())).ok()?;
        let line = status.lines().find(|line| line.starts_with("VmHWM:"))?;
        line.split_whitespace().nth(1)?.parse().ok()
    }

    /// The `*_ms` figures of every log line holding `marker`, in order.
    fn logged_timings(&self, marker: &str) -> Vec<Vec<(String, f64)>> {
        let text = std::fs::read_to_string(&self.log).unwrap_or_default();
        text.lines()
            .filter(|line| line.contains(marker))
            .map(|line| {
                line.split_whitespace()
                    .filter_map(|token| {
                        let (key, value) = token.split_once('=')?;
                        let key = key.strip_suffix("_ms")?;
                        Some((key.to_owned(), value.trim_matches('"').parse().ok()?))
                    })
                    .collect()
            })
            .collect()
    }
}

impl Drop for BenchDaemon {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

fn main() {
    if !bench::invoked_as_benchmark(BENCH) {
        return;
    }
    let binary = match std::env::var_os("MOBILIS_BENCH_DAEMON") {
        Some(other) => PathBuf::from(other),
        None => bench::build_release_plugins(BENCH, &["mobilis-plugin-hall"])
            .join(format!("mobilisd{}", std::env::consts::EXE_SUFFIX)),
    };
    let scratch = tempfile::tempdir().unwrap_or_else(|error| fail(BENCH, &format!("no temporary directory: {error}")));
    let data_root = scratch.path().join("data");
    std::fs::create_dir_all(&data_root).unwrap_or_else(|error| fail(BENCH, &error.to_string()));
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(1)
        .enable_all()
        .build()
        .unwrap_or_else(|error| fail(BENCH, &format!("cannot start the runtime: {error}")));

    let started = Instant::now();
    let (mut readings, mut sheet) =
        hall_readings::generate(hall_readings::SAMPLE_COUNT).unwrap_or_else(|message| fail(BENCH, &message));
    let reading_count = readings.height();
    println!(
        "{BENCH}: {} (built {}), {} CPUs; {reading_count} readings ({} samples x {SETPOINT_COUNT} temperatures x {READINGS_PER_TEMPERATURE}), generated in {:.1} s",
        binary.display(),
        age_of(&binary),
        std::thread::available_parallelism().map_or(1, |n| n.get()),
        hall_readings::SAMPLE_COUNT,
        started.elapsed().as_secs_f64()
    );
    let csv_path = data_root.join("readings.csv");
    let parquet_path = data_root.join("readings.parquet");
    let sheet_path = data_root.join("samples.csv");
    write_csv(&mut readings, &csv_path);
    write_parquet(&mut readings, &parquet_path);
    write_csv(&mut sheet, &sheet_path);
    println!(
        "files: {} of CSV, {} of Parquet (9 columns)",
        megabytes(&csv_path),
        megabytes(&parquet_path)
    );
    let raw_1m = raw_size_bytes(&readings);
    drop(readings);

    let daemon = BenchDaemon::start(
        &binary,
        &scratch.path().join("workspace"),
        &data_root,
        scratch.path().join("daemon.log"),
    );
    let mut http = runtime
        .block_on(Connection::open(&daemon.url, None))
        .unwrap_or_else(|message| fail(BENCH, &message));
    let mut call = |method: &str, params: Value| -> Value {
        runtime
            .block_on(http.call(method, params))
            .unwrap_or_else(|message| fail(BENCH, &format!("{method}: {message}")))
    };
    call(
        "dataset.import",
        json!({"name": "samples", "path": sheet_path.display().to_string()}),
    );

    let import = |call: &mut dyn FnMut(&str, Value) -> Value, path: &Path| {
        let path = path.display().to_string();
        bench::measure(1, IMPORT_REPETITIONS, || {
            call(
                "dataset.import",
                json!({"name": "readings", "path": path, "overwrite": true}),
            )
        })
    };
    let import_marker = "dataset.import timings";
    let store_marker = "store write timings";
    let skip = daemon.logged_timings(import_marker).len();
    let import_csv = import(&mut call, &csv_path);
    let csv_pieces = median_pieces(&daemon.logged_timings(import_marker)[skip..]);
    let skip = daemon.logged_timings(import_marker).len();
    let import_parquet = import(&mut call, &parquet_path);
    let parquet_pieces = median_pieces(&daemon.logged_timings(import_marker)[skip..]);
    let import_store_pieces = median_pieces(&daemon.logged_timings(store_marker)[skip..]);
    let run_params = json!({
        "analysis": "hall.reduce",
        "inputs": {"readings": "readings", "samples": "samples"},
        "output": "reduced",
        "overwrite": true,
    });
    let first_run = call("analysis.run", run_params.clone());
    let skip = daemon.logged_timings("analysis.run timings").len();
    let skip_stores = daemon.logged_timings(store_marker).len();
    let run = bench::measure(0, RUN_REPETITIONS, || call("analysis.run", run_params.clone()));
    let run_pieces = median_pieces(&daemon.logged_timings("analysis.run timings")[skip..]);
    let run_store_pieces = median_pieces(&daemon.logged_timings(store_marker)[skip_stores..]);
    // Round trips, each twice: through the lean clients of `load::raw_wire` (blocking
    // sockets, answers not parsed, only their opening checked), which is nearly all daemon
    // and loopback, and the figure the goals are for; and through the clients an
    // application uses (hyper with the answer read into a JSON value, the WebSocket client
    // of `mobilis_client`), whose own work is the difference.
    let server_info_http_client = bench::measure(100, ROUND_TRIPS, || call("server.info", json!({})));
    let rows_params = json!({"name": "readings", "offset": 123_456, "limit": ROWS_PAGE});
    let rows_client = bench::measure(1, ROWS_REPETITIONS, || call("dataset.rows", rows_params.clone()));
    let wire = measure_raw_wire(&daemon.url, &rows_params);
    let server_info_ws_client = runtime.block_on(async {
        let client = Client::connect(&daemon.url, None)
            .await
            .unwrap_or_else(|error| fail(BENCH, &format!("WebSocket: {error}")));
        let mut seconds = Vec::with_capacity(ROUND_TRIPS);
        for index in 0..ROUND_TRIPS + 100 {
            let started = Instant::now();
            client
                .call("server.info", json!({}))
                .await
                .unwrap_or_else(|error| fail(BENCH, &format!("server.info over WebSocket: {error}")));
            if index >= 100 {
                seconds.push(started.elapsed().as_secs_f64());
            }
        }
        timing_of(seconds)
    });
    drop(daemon);

    println!(
        "hall.reduce: {} output rows from {reading_count} readings",
        first_run["rows"]
    );
    println!();
    println!("{:<62} {:>10} {:>10} {:>10}", "figure", "median", "min", "goal");
    let mut missed = Vec::new();
    let mut line = |label: &str, timing: &Timing, goal_s: f64| {
        let verdict = if timing.median_s <= goal_s {
            ""
        } else {
            missed.push(label.to_owned());
            "  ABOVE"
        };
        println!(
            "{label:<62} {:>10} {:>10} {:>10}{verdict}",
            format_seconds(timing.median_s),
            format_seconds(timing.min_s),
            format!("<= {}", format_seconds(goal_s))
        );
    };
    line(
        "dataset.import, 1e6 rows x 9 columns, CSV",
        &import_csv,
        IMPORT_CSV_GOAL_S,
    );
    line(
        "dataset.import, the same as Parquet",
        &import_parquet,
        IMPORT_PARQUET_GOAL_S,
    );
    line(
        "analysis.run hall.reduce on 1e6 readings, output stored",
        &run,
        RUN_GOAL_S,
    );
    line(
        "server.info round trip, HTTP keep-alive",
        &wire.server_info_http,
        SERVER_INFO_HTTP_GOAL_S,
    );
    line(
        "server.info round trip, WebSocket",
        &wire.server_info_ws,
        SERVER_INFO_WS_GOAL_S,
    );
    line(
        "dataset.rows, 10,000 rows x 9 columns, HTTP",
        &wire.rows_http,
        ROWS_GOAL_S,
    );
    println!("the round trips above by lean clients (answers not parsed); with an application's client:");
    let client_line = |label: &str, timing: &Timing, lean: &Timing| {
        println!(
            "  {label:<60} {:>10} {:>10}   client's own share {}",
            format_seconds(timing.median_s),
            format_seconds(timing.min_s),
            format_seconds((timing.median_s - lean.median_s).max(0.0))
        );
    };
    client_line(
        "server.info, HTTP (hyper, answer read as a JSON value)",
        &server_info_http_client,
        &wire.server_info_http,
    );
    client_line(
        "server.info, WebSocket (mobilis_client)",
        &server_info_ws_client,
        &wire.server_info_ws,
    );
    client_line(
        "dataset.rows, HTTP (hyper, answer read as a JSON value)",
        &rows_client,
        &wire.rows_http,
    );
    println!(
        "  reading the dataset.rows answer ({:.2} MB) into a JSON value alone: {}",
        wire.rows_bytes as f64 / 1e6,
        format_seconds(wire.rows_parse.median_s)
    );
    println!("pieces in the daemon, medians of the timed calls:");
    println!("  dataset.import CSV: {}", describe_pieces(&csv_pieces));
    println!(
        "  dataset.import Parquet: {}; its store: {}",
        describe_pieces(&parquet_pieces),
        describe_pieces(&import_store_pieces)
    );
    println!(
        "  analysis.run: {}; its store: {}",
        describe_pieces(&run_pieces),
        describe_pieces(&run_store_pieces)
    );
    println!(
        "readings through analysis.run: {:.3e} per second; raw data of 1e6 readings {:.0} MB",
        reading_count as f64 / run.median_s,
        raw_1m as f64 / 1e6
    );

    if std::env::var_os("MOBILIS_BENCH_SKIP_10M").is_some() {
        println!("ten million readings: left out (MOBILIS_BENCH_SKIP_10M)");
    } else {
        ten_million(&runtime, &binary, scratch.path(), &data_root, &mut missed);
    }
    if missed.is_empty() {
        println!("{BENCH}: every figure within its goal");
    } else {
        println!("{BENCH}: above the goal: {}", missed.join("; "));
    }
}

/// Round trips through the lean clients of [`raw_wire`].
struct WireTimings {
    server_info_http: Timing,
    server_info_ws: Timing,
    rows_http: Timing,
    /// Size of the `dataset.rows` answer, and the time a client takes to read it as a value.
    rows_bytes: usize,
    rows_parse: Timing,
}

fn measure_raw_wire(url: &str, rows_params: &Value) -> WireTimings {
    let refuse = |what: &str, message: String| -> ! { fail(BENCH, &format!("{what}: {message}")) };
    // Only the opening of an answer is checked: its id, and a result rather than an error.
    let check = |what: &str, answer: &[u8], id: u64| {
        let expected = format!(r#"{{"jsonrpc":"2.0","id":{id},"result":"#);
        if !answer.starts_with(expected.as_bytes()) {
            let shown = String::from_utf8_lossy(&answer[..answer.len().min(300)]).into_owned();
            refuse(what, format!("an unexpected answer: {shown}"));
        }
    };
    let info = br#"{"jsonrpc":"2.0","id":7,"method":"server.info"}"#;
    let rows = json!({"jsonrpc": "2.0", "id": 8, "method": "dataset.rows", "params": rows_params}).to_string();

    let mut http = raw_wire::Http::open(url).unwrap_or_else(|message| refuse("HTTP", message));
    let server_info_http = bench::measure(100, ROUND_TRIPS, || {
        let answer = http.call(info).unwrap_or_else(|m| refuse("server.info over HTTP", m));
        check("server.info over HTTP", answer, 7);
    });
    let rows_http = bench::measure(1, ROWS_REPETITIONS, || {
        let answer = http.call(rows.as_bytes()).unwrap_or_else(|m| refuse("dataset.rows", m));
        check("dataset.rows", answer, 8);
    });
    let body = http
        .call(rows.as_bytes())
        .unwrap_or_else(|m| refuse("dataset.rows", m))
        .to_vec();
    let rows_parse = bench::measure(1, ROWS_REPETITIONS, || {
        serde_json::from_slice::<Value>(&body).unwrap_or_else(|e| refuse("dataset.rows", e.to_string()))
    });
    drop(http);

    let mut socket = raw_wire::WebSocket::open(url).unwrap_or_else(|message| refuse("WebSocket", message));
    let server_info_ws = bench::measure(100, ROUND_TRIPS, || {
        let answer = socket
            .call(info)
            .unwrap_or_else(|m| refuse("server.info over WebSocket", m));
        check("server.info over WebSocket", answer, 7);
    });
    WireTimings {
        server_info_http,
        server_info_ws,
        rows_http,
        rows_bytes: body.len(),
        rows_parse,
    }
}

/// Ten million readings: generated, written as Parquet, imported with progress over a
/// WebSocket, reduced; the daemon's peak RSS against the raw data size.
fn ten_million(
    runtime: &tokio::runtime::Runtime,
    binary: &Path,
    scratch: &Path,
    data_root: &Path,
    missed: &mut Vec<String>,
) {
    let samples = 10 * hall_readings::SAMPLE_COUNT;
    let started = Instant::now();
    let (mut readings, mut sheet) = hall_readings::generate(samples).unwrap_or_else(|message| fail(BENCH, &message));
    let count = readings.height();
    let generated_s = started.elapsed().as_secs_f64();
    let parquet_path = data_root.join("readings-10m.parquet");
    let sheet_path = data_root.join("samples-10m.csv");
    write_parquet(&mut readings, &parquet_path);
    write_csv(&mut sheet, &sheet_path);
    let raw = raw_size_bytes(&readings);
    drop(readings);
    println!();
    println!(
        "{count} readings ({samples} samples), generated in {generated_s:.1} s, {} of Parquet; raw data {:.0} MB",
        megabytes(&parquet_path),
        raw as f64 / 1e6
    );

    let daemon = BenchDaemon::start(
        binary,
        &scratch.join("workspace-10m"),
        data_root,
        scratch.join("daemon-10m.log"),
    );
    let (import_s, import_peak_kib, events, run_s, answer) = runtime.block_on(async {
        let client = Client::connect(&daemon.url, None)
            .await
            .unwrap_or_else(|error| fail(BENCH, &format!("WebSocket: {error}")));
        client
            .call(
                "dataset.import",
                json!({"name": "samples", "path": sheet_path.display().to_string()}),
            )
            .await
            .unwrap_or_else(|error| fail(BENCH, &format!("dataset.import of the sheet: {error}")));
        let mut reports = 0usize;
        let started = Instant::now();
        client
            .call_with_progress(
                "dataset.import",
                json!({"name": "readings", "path": parquet_path.display().to_string()}),
                |event| {
                    if matches!(event, ProgressEvent::Report { .. }) {
                        reports += 1;
                    }
                },
            )
            .await
            .unwrap_or_else(|error| fail(BENCH, &format!("dataset.import of 1e7 readings: {error}")));
        let import_s = started.elapsed().as_secs_f64();
        // The peak so far is the import's: which of import and reduce holds the most.
        let import_peak_kib = daemon.peak_rss_kib();
        let started = Instant::now();
        let answer = client
            .call(
                "analysis.run",
                json!({
                    "analysis": "hall.reduce",
                    "inputs": {"readings": "readings", "samples": "samples"},
                    "output": "reduced",
                }),
            )
            .await
            .unwrap_or_else(|error| fail(BENCH, &format!("hall.reduce of 1e7 readings: {error}")));
        (
            import_s,
            import_peak_kib,
            reports,
            started.elapsed().as_secs_f64(),
            answer,
        )
    });
    let peak_kib = daemon.peak_rss_kib();
    let pieces = median_pieces(&daemon.logged_timings("analysis.run timings"));
    let import_pieces = median_pieces(&daemon.logged_timings("dataset.import timings"));
    // The second store of this daemon is the readings' (the sheet is the first).
    let stores = daemon.logged_timings("store write timings");
    let import_store_pieces = median_pieces(stores.get(1..2).unwrap_or_default());
    drop(daemon);
    println!(
        "dataset.import of 1e7 readings (Parquet): {} with {events} progress reports; {}; its store: {}",
        format_seconds(import_s),
        describe_pieces(&import_pieces),
        describe_pieces(&import_store_pieces)
    );
    if let Some(kib) = import_peak_kib {
        println!(
            "daemon peak RSS after the import, before the reduction: {:.0} MB = {:.2} x the raw data",
            kib as f64 * 1024.0 / 1e6,
            kib as f64 * 1024.0 / raw as f64
        );
    }
    println!(
        "analysis.run hall.reduce on 1e7 readings: {} ({} output rows, {:.3e} readings per second); {}",
        format_seconds(run_s),
        answer["rows"],
        count as f64 / run_s,
        describe_pieces(&pieces)
    );
    match peak_kib {
        Some(kib) => {
            let peak = kib as f64 * 1024.0;
            let ratio = peak / raw as f64;
            let verdict = if ratio <= PEAK_OVER_RAW_GOAL {
                "within"
            } else {
                missed.push("peak RSS at 1e7 readings".into());
                "ABOVE"
            };
            println!(
                "daemon peak RSS (VmHWM): {:.0} MB = {ratio:.2} x the raw data: {verdict} the goal of {PEAK_OVER_RAW_GOAL} x",
                peak / 1e6
            );
        }
        None => println!("daemon peak RSS: n/a (no /proc)"),
    }
    println!(
        "raw data size: 8 bytes per value of the eight numeric columns plus the UTF-8 bytes of \
         `sample` and one 8-byte offset per row (Arrow's large-string layout)"
    );
}

/// The size of a table as plain Arrow arrays: 8 bytes per numeric value, a text column as
/// its UTF-8 bytes plus one 8-byte offset per row.
fn raw_size_bytes(frame: &DataFrame) -> u64 {
    frame
        .columns()
        .iter()
        .map(|column| match column.str() {
            Ok(text) => {
                let bytes: usize = text.iter().map(|value| value.map_or(0, str::len)).sum();
                (bytes + 8 * column.len()) as u64
            }
            Err(_) => 8 * column.len() as u64,
        })
        .sum()
}

fn write_csv(frame: &mut DataFrame, path: &Path) {
    let mut file =
        std::fs::File::create(path).unwrap_or_else(|error| fail(BENCH, &format!("{}: {error}", path.display())));
    CsvWriter::new(&mut file)
        .include_header(true)
        .finish(frame)
        .unwrap_or_else(|error| fail(BENCH, &format!("{}: {error}", path.display())));
}

fn write_parquet(frame: &mut DataFrame, path: &Path) {
    let mut file =
        std::fs::File::create(path).unwrap_or_else(|error| fail(BENCH, &format!("{}: {error}", path.display())));
    ParquetWriter::new(&mut file)
        .finish(frame)
        .unwrap_or_else(|error| fail(BENCH, &format!("{}: {error}", path.display())));
}

fn megabytes(path: &Path) -> String {
    let bytes = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    format!("{:.0} MB", bytes as f64 / 1e6)
}

fn timing_of(mut seconds: Vec<f64>) -> Timing {
    seconds.sort_by(f64::total_cmp);
    Timing {
        median_s: seconds[seconds.len() / 2],
        min_s: seconds[0],
    }
}

/// The median of each named piece over several logged calls, in the order first logged.
fn median_pieces(lines: &[Vec<(String, f64)>]) -> Vec<(String, f64)> {
    let Some(first) = lines.first() else {
        return Vec::new();
    };
    first
        .iter()
        .map(|(name, _)| {
            let mut values: Vec<f64> = lines
                .iter()
                .filter_map(|line| line.iter().find(|(n, _)| n == name).map(|(_, v)| *v))
                .collect();
            values.sort_by(f64::total_cmp);
            (name.clone(), values[values.len() / 2])
        })
        .collect()
}

fn describe_pieces(pieces: &[(String, f64)]) -> String {
    if pieces.is_empty() {
        return "no timings in the daemon's log".into();
    }
    pieces
        .iter()
        .map(|(name, ms)| format!("{name} {}", format_seconds(ms / 1e3)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// How long ago a file was written, for the header line (a stale daemon shows here).
fn age_of(path: &Path) -> String {
    let Ok(modified) = std::fs::metadata(path).and_then(|m| m.modified()) else {
        return "at an unknown time".into();
    };
    match modified.elapsed() {
        Ok(age) if age.as_secs() < 120 => format!("{} s ago", age.as_secs()),
        Ok(age) if age.as_secs() < 7200 => format!("{} min ago", age.as_secs() / 60),
        Ok(age) => format!("{} h ago", age.as_secs() / 3600),
        Err(_) => "just now".into(),
    }
}
