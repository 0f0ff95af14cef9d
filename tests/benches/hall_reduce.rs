//! Throughput of `hall.reduce` on a million raw readings, and what the plugin boundary
//! costs for a table of that size.
//!
//! Run it with
//!
//! ```text
//! cargo bench -p mobilis-tests --bench hall_reduce
//! ```
//!
//! It first builds the release plugin libraries it loads (`cargo build --release -p
//! mobilis-plugin-hall -p mobilis-test-fixture`, into `target/release` or
//! `$CARGO_TARGET_DIR/release`) and stops with cargo's message if that fails. It then
//! generates, with the forward models of `mobilis_core::forward` and a fixed seed, a
//! temperature run of 100 compensated n-type silicon van der Pauw pieces at 625 temperatures
//! (26 K to 650 K), 16 readings each (8 resistance readings at zero field, 8 Hall readings
//! at +-0.5 T): 1,000,000 readings with voltmeter noise, thermoelectric offsets, Hall
//! misalignment, controller jitter and the six lab wirings. The sample sheet (thickness,
//! Hall factor) goes in as the `samples` table.
//!
//! Every figure is the wall time of one call, after one untimed warm-up call, over several
//! timed repetitions; the table gives the median and the fastest. Dropping a call's result
//! is not timed.
//!
//! - (a) `hall.reduce` through `PluginHost::invoke`, as the daemon calls it: export of the
//!   readings, their import in the plugin, the reduction, the export of the 62,500-row
//!   result and its import in the host. The rate is input readings per second.
//! - (b) `fixture.identity` through `PluginHost::invoke` on the same readings: the table is
//!   exported, imported by the plugin, exported back unchanged and imported by the host, so
//!   this is the whole cost of the boundary (both ways) for this table, with no compute.
//! - (c) `table_ffi::export_frame` followed by `table_ffi::import_frame` in the same
//!   process: one crossing without a plugin, the reference for (b), which makes two.
//! - (b') and (c'): the same without the `sample` column. Numeric columns cross without a
//!   copy; a string column is rewritten to the classic large UTF-8 layout on export and
//!   back to string views on import (see `mobilis_core::abi`), so the difference between
//!   (b) and (b') is what the text column costs.
//!
//! - (a-iso) and (b-iso): (a) and (b) with the plugins isolated, as the daemon runs a
//!   `--plugin-dir` library: the call goes to a worker process (`mobilisd --plugin-worker`,
//!   the release binary), inputs and output cross its pipes as Arrow IPC. The difference to
//!   (a) and (b) is the cost of isolation.
//!
//! Peak RSS is the process's high-water mark (`VmHWM` of `/proc/self/status`; Linux only),
//! read after the dataset is built and at the end, so that the second figure shows what the
//! calls added on top of the data.
//!
//! Cargo passes `--bench` to the binary under `cargo bench`; without it (for example under
//! `cargo test --all-targets`, in a debug build) the binary only says how to run it.

use mobilis_core::table_ffi;
use mobilis_rpc::plugin_host::{CallControl, PluginHost};
use mobilis_rpc::plugin_supervisor::WorkerSettings;
use mobilis_tests::bench::{self, format_kib, format_seconds, peak_rss_kib, Timing};
use mobilis_tests::hall_readings::{self, READINGS_PER_TEMPERATURE, SAMPLE_COUNT, SETPOINT_COUNT};
use polars::prelude::*;
use std::sync::Arc;
use std::time::Instant;

const BENCH: &str = "hall_reduce";

/// Untimed calls before the timed ones: the first call pays for page faults, lazy
/// initialisation and the plugins' thread pools.
const WARM_UP: usize = 1;
/// Odd, so that the median is one measured call.
const REDUCE_REPETITIONS: usize = 7;
const BOUNDARY_REPETITIONS: usize = 11;

fn main() {
    if !bench::invoked_as_benchmark(BENCH) {
        return;
    }

    let release = bench::build_release_plugins(BENCH, &["mobilis-plugin-hall", "mobilis-test-fixture"]);
    let host = bench::load_plugins(BENCH, &release, &["mobilis_hall", "test_fixture_plugin"]);
    let worker_program = release.join(format!("mobilisd{}", std::env::consts::EXE_SUFFIX));
    let mut isolated_host = PluginHost::default().with_workers(WorkerSettings::new(
        worker_program,
        std::time::Duration::from_secs(3600),
    ));
    for lib_name in ["mobilis_hall", "test_fixture_plugin"] {
        let file = release.join(format!(
            "{}{lib_name}{}",
            std::env::consts::DLL_PREFIX,
            std::env::consts::DLL_SUFFIX
        ));
        if let Err(reason) = isolated_host.load_isolated(&file) {
            fail(&format!("cannot load {} isolated: {reason}", file.display()));
        }
    }

    let started = Instant::now();
    let (readings, sheet) = hall_readings::generate(SAMPLE_COUNT).unwrap_or_else(|message| fail(&message));
    let generation_s = started.elapsed().as_secs_f64();
    let reading_count = readings.height();
    let peak_after_generation = peak_rss_kib();
    println!(
        "dataset: {reading_count} readings ({SAMPLE_COUNT} samples x {SETPOINT_COUNT} temperatures x {READINGS_PER_TEMPERATURE}), generated in {generation_s:.2} s"
    );

    let control = Arc::new(CallControl::default());
    let no_params = serde_json::json!({});
    let reduce_inputs = vec![("readings".to_owned(), readings.clone()), ("samples".to_owned(), sheet)];
    let numeric = readings
        .drop("sample")
        .unwrap_or_else(|error| fail(&format!("cannot drop the sample column: {error}")));

    let invoke_in = |host: &PluginHost, analysis: &str, inputs: &[(String, DataFrame)]| {
        host.invoke(analysis, &no_params, inputs, &control)
            .unwrap_or_else(|failure| {
                fail(&format!(
                    "{analysis} failed (status {}): {}",
                    failure.status, failure.message
                ))
            })
    };
    let invoke = |analysis: &str, inputs: &[(String, DataFrame)]| invoke_in(&host, analysis, inputs);
    let invoke_isolated = |analysis: &str, inputs: &[(String, DataFrame)]| invoke_in(&isolated_host, analysis, inputs);

    // Checked once, untimed: a figure for a call that returned the wrong thing means nothing.
    let reduced = invoke("hall.reduce", &reduce_inputs);
    let output_rows = reduced.table.height();
    let flagged_rows = reduced.summary["flagged_rows"].as_i64().unwrap_or(-1);
    let flag_counts = reduced.summary["flag_counts"].to_string();
    drop(reduced);
    let identity_inputs = vec![("values".to_owned(), readings.clone())];
    let numeric_inputs = vec![("values".to_owned(), numeric.clone())];
    let echoed = invoke("fixture.identity", &identity_inputs);
    if !echoed.table.equals_missing(&readings) {
        fail("fixture.identity did not return its input table unchanged");
    }
    drop(echoed);
    let isolated_reduced = invoke_isolated("hall.reduce", &reduce_inputs);
    if isolated_reduced.table.height() != output_rows {
        fail("hall.reduce in a worker returned another number of rows than in process");
    }
    drop(isolated_reduced);
    println!("hall.reduce: {output_rows} output rows, {flagged_rows} of them flagged {flag_counts}");

    let reduce = bench::measure(WARM_UP, REDUCE_REPETITIONS, || invoke("hall.reduce", &reduce_inputs));
    let identity = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
        invoke("fixture.identity", &identity_inputs)
    });
    let identity_numeric = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
        invoke("fixture.identity", &numeric_inputs)
    });
    let reduce_isolated = bench::measure(WARM_UP, REDUCE_REPETITIONS, || {
        invoke_isolated("hall.reduce", &reduce_inputs)
    });
    let identity_isolated = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
        invoke_isolated("fixture.identity", &identity_inputs)
    });
    let in_process = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || round_trip(&readings));
    let in_process_numeric = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || round_trip(&numeric));
    let peak_at_end = peak_rss_kib();

    println!();
    println!(
        "{:<58} {:>11} {:>11} {:>16}",
        "figure (one call)", "median", "min", "readings/s"
    );
    let line = |label: &str, timing: &Timing| {
        println!(
            "{:<58} {:>11} {:>11} {:>16.3e}",
            label,
            format_seconds(timing.median_s),
            format_seconds(timing.min_s),
            reading_count as f64 / timing.median_s
        );
    };
    line("(a)  hall.reduce via PluginHost::invoke", &reduce);
    line("(a-iso) hall.reduce in an isolated worker", &reduce_isolated);
    line("(b)  fixture.identity via PluginHost::invoke", &identity);
    line("(b-iso) fixture.identity in an isolated worker", &identity_isolated);
    line("(b') fixture.identity, without the sample column", &identity_numeric);
    line("(c)  export_frame + import_frame in-process", &in_process);
    line(
        "(c') export_frame + import_frame, without the sample column",
        &in_process_numeric,
    );
    println!(
        "timed calls: {REDUCE_REPETITIONS} for (a) and (a-iso), {BOUNDARY_REPETITIONS} for the others, each after {WARM_UP} warm-up; {} columns, {} numeric",
        readings.width(),
        numeric.width()
    );
    let signed = |seconds: f64| {
        let sign = if seconds < 0.0 { "-" } else { "+" };
        format!("{sign}{}", format_seconds(seconds.abs()))
    };
    println!(
        "cost of isolation (median, isolated minus in process): hall.reduce {} per call ({:+.1} %), the boundary both ways {}",
        signed(reduce_isolated.median_s - reduce.median_s),
        100.0 * (reduce_isolated.median_s / reduce.median_s - 1.0),
        signed(identity_isolated.median_s - identity.median_s)
    );
    println!(
        "peak RSS (VmHWM): {} after generating the dataset, {} at the end",
        format_kib(peak_after_generation),
        format_kib(peak_at_end)
    );
}

/// Stops the benchmark with a message on stderr.
fn fail(message: &str) -> ! {
    bench::fail(BENCH, message)
}

/// One crossing of the boundary in-process: export, then import into a new DataFrame.
fn round_trip(frame: &DataFrame) -> DataFrame {
    let (schema, array) =
        table_ffi::export_frame(frame).unwrap_or_else(|error| fail(&format!("export_frame failed: {error}")));
    // SAFETY: both structures were just exported from a live DataFrame of this process, and
    // their release callbacks are this binary's own code.
    unsafe { table_ffi::import_frame(&schema, array) }
        .unwrap_or_else(|error| fail(&format!("import_frame failed: {error}")))
}
