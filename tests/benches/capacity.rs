//! Capacity of a release `mobilisd` under many clients: throughput, p50 and p99 per method,
//! and what the daemon spent (CPU, memory) to serve them.
//!
//! Run it with
//!
//! ```text
//! cargo build --release -p mobilis-rpc --bin mobilisd -p mobilis-plugin-hall
//! cargo bench -p mobilis-tests --bench capacity
//! ```
//!
//! It starts the release daemon of `target/release` (or `$CARGO_TARGET_DIR/release`) with the
//! hall plugin beside it, on a fresh workspace per transport, and stops with the build
//! command above when either is missing. It does not build them itself: a release build
//! takes many minutes, and a benchmark of a stale daemon would mislead, so the command says
//! what to build and when it was built.
//!
//! The generator ([`mobilis_tests::load`]) runs 32 clients x 1,000 requests over HTTP/1.1
//! keep-alive and then over WebSocket: cheap reads (`server.info`, `dataset.list`,
//! `dataset.info`, `analysis.describe`) mixed with `hall.reduce` runs whose outputs are
//! kept or dropped at once. Environment variables change the plan:
//!
//! - `MOBILIS_LOAD_CLIENTS` (32), `MOBILIS_LOAD_REQUESTS` (1000 per client);
//! - `MOBILIS_LOAD_TRANSPORTS` (`http,websocket`);
//! - `MOBILIS_COMPUTE_SLOTS`: passed as `--compute-slots` (default: the daemon's, one per CPU);
//! - `MOBILIS_LOAD_DAEMON`: another `mobilisd` to measure (its directory must hold the hall
//!   plugin), for example a debug build to compare; the header line names the binary.
//!
//! The daemon's CPU share is its user plus system time (`/proc/PID/stat`) over the run's wall
//! time; the generator's own share is printed beside it, to show that it was not the limit.
//! Afterwards every kept output must be listed and every dropped one gone; the counts are
//! printed as tried, failed, lost. Nothing here asserts on time: the figures are for reading.

use mobilis_client::{Daemon, DaemonOptions};
use mobilis_tests::bench::{self, fail};
use mobilis_tests::load::{self, milliseconds, LoadPlan, ProcessUsage, Step, Transport};
use std::path::PathBuf;
use std::time::Instant;

const BENCH: &str = "capacity";

/// The goal for cheap calls under this load.
const SERVER_INFO_P99_GOAL_MS: f64 = 20.0;

fn main() {
    if !bench::invoked_as_benchmark(BENCH) {
        return;
    }
    let clients = number_from_env("MOBILIS_LOAD_CLIENTS", 32);
    let requests = number_from_env("MOBILIS_LOAD_REQUESTS", 1000);
    let transports: Vec<Transport> = std::env::var("MOBILIS_LOAD_TRANSPORTS")
        .unwrap_or_else(|_| "http,websocket".into())
        .split(',')
        .map(|name| {
            Transport::parse(name).unwrap_or_else(|| {
                fail(
                    BENCH,
                    &format!("MOBILIS_LOAD_TRANSPORTS: `{name}` is neither http nor websocket"),
                )
            })
        })
        .collect();
    let slots = std::env::var("MOBILIS_COMPUTE_SLOTS").ok();

    let daemon_binary = std::env::var_os("MOBILIS_LOAD_DAEMON")
        .map(PathBuf::from)
        .unwrap_or_else(|| release_directory().join("mobilisd"));
    let beside = daemon_binary.parent().map(PathBuf::from).unwrap_or_default();
    let hall = beside.join(format!(
        "{}mobilis_hall{}",
        std::env::consts::DLL_PREFIX,
        std::env::consts::DLL_SUFFIX
    ));
    for needed in [&daemon_binary, &hall] {
        if !needed.is_file() {
            fail(
                BENCH,
                &format!(
                    "{} is missing; build the release daemon and the hall plugin first:\n  cargo build --release -p mobilis-rpc --bin mobilisd -p mobilis-plugin-hall",
                    needed.display()
                ),
            );
        }
    }
    println!(
        "{BENCH}: {} (built {}), {} CPUs, {clients} clients x {requests} requests per transport",
        daemon_binary.display(),
        age_of(&daemon_binary),
        std::thread::available_parallelism().map_or(1, |n| n.get())
    );

    let runtime = tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
        .unwrap_or_else(|error| fail(BENCH, &format!("cannot start the runtime: {error}")));
    let mut all_within_goal = true;
    for transport in transports {
        let workspace =
            tempfile::tempdir().unwrap_or_else(|error| fail(BENCH, &format!("no temporary directory: {error}")));
        let mut extra_arguments = Vec::new();
        if let Some(slots) = &slots {
            extra_arguments.extend(["--compute-slots".to_owned(), slots.clone()]);
        }
        let daemon = Daemon::spawn(&DaemonOptions {
            binary: Some(daemon_binary.clone()),
            workspace: Some(workspace.path().join("workspace")),
            working_directory: Some(workspace.path().to_owned()),
            show_log: std::env::var_os("MOBILIS_BENCH_LOG").is_some(),
            extra_arguments,
            ..DaemonOptions::default()
        })
        .unwrap_or_else(|error| fail(BENCH, &format!("cannot start {}: {error}", daemon_binary.display())));
        let url = daemon.url().to_owned();
        runtime
            .block_on(load::prepare(&url, None))
            .unwrap_or_else(|message| fail(BENCH, &message));

        let plan = LoadPlan {
            url: url.clone(),
            token: None,
            transport,
            clients,
            requests_per_client: requests,
            tag: format!("load-{}", transport.name()),
        };
        let daemon_before = ProcessUsage::of(daemon.pid());
        let generator_before = ProcessUsage::of(std::process::id());
        let started = Instant::now();
        let report = runtime.block_on(load::run(&plan));
        let wall = started.elapsed();
        let daemon_after = ProcessUsage::of(daemon.pid());
        let generator_after = ProcessUsage::of(std::process::id());
        let (lost, left) = runtime
            .block_on(load::verify_outputs(&url, None, &report, &plan.tag))
            .unwrap_or_else(|message| fail(BENCH, &message));

        println!();
        println!(
            "{BENCH}: {} ({}), {clients} clients x {requests} requests",
            transport.name(),
            match transport {
                Transport::HttpKeepAlive => "HTTP/1.1, one kept-alive connection per client",
                Transport::WebSocket => "one WebSocket per client",
            }
        );
        println!(
            "  {} requests in {:.1} s: {:.0} answered per second; failed {}",
            report.requests,
            report.wall.as_secs_f64(),
            report.throughput(),
            report.failed
        );
        print!("{}", report.table());
        if let (Some(before), Some(after)) = (daemon_before, daemon_after) {
            let cores = after.cores_since(&before, wall);
            let cpus = std::thread::available_parallelism().map_or(1, |n| n.get());
            println!(
                "  daemon: CPU {cores:.2} cores ({:.0} % of {cpus}), RSS {} MiB now, peak {} MiB",
                100.0 * cores / cpus as f64,
                after.rss_kib / 1024,
                after.peak_rss_kib / 1024
            );
        }
        if let (Some(before), Some(after)) = (generator_before, generator_after) {
            println!("  generator: CPU {:.2} cores", after.cores_since(&before, wall));
        }
        println!(
            "  stored: {} kept outputs, {lost} of them missing; {} dropped, {left} of them still listed",
            report.kept_outputs.len(),
            report.dropped_outputs.len()
        );
        for message in &report.failure_samples {
            println!("  failure: {message}");
        }
        if let Some(info) = report.figures(Step::ServerInfo) {
            let p99_ms = info.p99.as_secs_f64() * 1e3;
            let verdict = if p99_ms <= SERVER_INFO_P99_GOAL_MS {
                "within"
            } else {
                all_within_goal = false;
                "ABOVE"
            };
            println!(
                "  server.info p99 {}: {verdict} the {SERVER_INFO_P99_GOAL_MS} ms goal",
                milliseconds(info.p99)
            );
        }
        println!(
            "reliability: load {} {clients}x{requests}: tried {}, failed {}, lost {lost}",
            transport.name(),
            report.requests,
            report.failed + left
        );
        daemon.stop();
    }
    if !all_within_goal {
        println!("{BENCH}: server.info p99 was above the goal on at least one transport");
    }
}

fn number_from_env(name: &str, default: usize) -> usize {
    match std::env::var(name) {
        Ok(text) => text
            .trim()
            .parse()
            .ok()
            .filter(|n| *n > 0)
            .unwrap_or_else(|| fail(BENCH, &format!("{name}={text}: give a whole number of 1 or more"))),
        Err(_) => default,
    }
}

/// `target/release` (or `$CARGO_TARGET_DIR/release`).
fn release_directory() -> PathBuf {
    let debug = mobilis_tests::build_directory();
    debug
        .parent()
        .map_or_else(|| PathBuf::from("release"), |target| target.join("release"))
}

/// How long ago a file was written, for the header line (a stale daemon shows here).
fn age_of(path: &std::path::Path) -> String {
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
