//! Throughput of `hall.reduce` on a million raw readings against the goals of issue 13,
//! against a vectorized numpy/pandas reduction of the same readings, as the readings grow
//! from 1e4 to 1e7, and what the plugin boundary costs for a table of that size.
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
//! generates, with the forward models of `mobilis_physics::forward` and a fixed seed
//! ([`mobilis_tests::hall_readings`], shared with the `daemon` benchmark), a
//! temperature run of 100 compensated n-type silicon van der Pauw pieces at 625 temperatures
//! (26 K to 650 K), 16 readings each (8 resistance readings at zero field, 8 Hall readings
//! at +-0.5 T): 1,000,000 readings with voltmeter noise, thermoelectric offsets, Hall
//! misalignment, controller jitter and the six lab wirings. The sample sheet (thickness,
//! Hall factor) goes in as the `samples` table.
//!
//! Every figure is the wall time of one call, after one untimed warm-up call, over several
//! timed repetitions; the tables give the median and the fastest. Dropping a call's result
//! is not timed. Each goal is printed beside its figure with `met` or `NOT met`.
//!
//! Sections (all by default; `HALL_REDUCE_SECTIONS=reduce,peer` runs some):
//!
//! - `reduce`: (a) `hall.reduce` through `PluginHost::invoke`, as the daemon calls it:
//!   export of the readings, their import in the plugin, the reduction, the export of the
//!   62,500-row result and its import in the host. The rate is input readings per second.
//!   Goals: at most 40 ms, at least 25e6 readings per second.
//! - `peer`: `hall_reduce_peer.py`, next to this file, the reduction a careful lab scripter
//!   writes with numpy and pandas (vectorized least squares per cell, van der Pauw by
//!   vectorized Newton, Hall coefficient, density, mobility, standard errors). The bench
//!   writes the readings to a temporary directory as raw little-endian columns with a JSON
//!   sidecar (numpy reads them without pyarrow); the script times its reduction only, file
//!   reading excluded, and prints one JSON line. The bench prints the peer's median, the
//!   ratio to (a) (goal: mobilis at least 10x faster) and, as a sanity check, a few rows'
//!   densities and mobilities from both (they agree to a fraction of a percent on this
//!   clean data). Without `python3`, numpy or pandas the bench says so and goes on.
//! - `scaling`: `hall.reduce` at 1e4, 1e5, 1e6 and 1e7 readings (1, 10, 100 and 1000
//!   samples), readings per second at each, and whether the cost per reading stays within
//!   1.5x from 1e5 to 1e7 (linear). 1e4 and 1e5 are the first samples of the dataset; 1e7
//!   is the dataset tiled ten times under new sample names, so that generation stays a
//!   matter of seconds (the reduction does the same work whatever the values). The peak
//!   RSS after this section includes the 1e7 table (about 0.9 GB as Arrow columns).
//! - `drift`: `hall.reduce` on 1e5 readings of a run that drifts as a real cryostat does
//!   (10 samples, 30 mK of stage drift between readings, autoranged current, field
//!   remanence and wander, calibration errors: [`mobilis_tests::hall_readings::generate_drifting`]),
//!   so that every temperature group is drift-corrected, against the first 1e5 readings of
//!   the steady dataset; it prints how many rows were corrected and the ratio of the two
//!   medians. No goal: the figure says what the correction passes cost.
//! - `boundary`: (b) `fixture.identity` through `PluginHost::invoke` on the same readings:
//!   the table is exported, imported by the plugin, exported back unchanged and imported by
//!   the host, so this is the whole cost of the boundary (both ways) for this table, with
//!   no compute. (c) `table_ffi::export_frame` followed by `table_ffi::import_frame` in the
//!   same process: one crossing without a plugin. (b') and (c'): the same without the
//!   `sample` column. Every column crosses without a copy (text as Arrow string views, see
//!   `mobilis_sdk::table_ffi`), so the difference between (b) and (b') is what the text
//!   column costs: one buffer more, no copy.
//! - `isolated`: (a-iso) and (b-iso): (a) and (b) with the plugins isolated, as the daemon
//!   runs a `--plugin-dir` library: the call goes to a worker process (`mobilisd
//!   --plugin-worker`, the release binary), inputs and output cross its pipes as Arrow IPC.
//!
//! `HALL_REDUCE_REPETITIONS=N` times the `reduce` section's call N times instead of 7, for a
//! profiler: `perf record -D 5000` (start recording after five seconds) then sees mostly the
//! reduction, not the dataset's generation.
//!
//! The result check: with `HALL_REDUCE_SAVE_OUTPUT=FILE` the output of `hall.reduce` on the
//! dataset (every column, floats in their exact shortest form, the summary and the
//! warnings) is written to FILE; with `HALL_REDUCE_COMPARE_OUTPUT=FILE` it is compared with
//! a saved one column by column, and the bench prints the largest relative difference and
//! stops if it exceeds 1e-12 or if any null, text, flag or count differs. Save before a
//! change to the reduction, compare after.
//!
//! Peak RSS is the process's high-water mark (`VmHWM` of `/proc/self/status`; Linux only).
//!
//! Cargo passes `--bench` to the binary under `cargo bench`; without it (for example under
//! `cargo test --all-targets`, in a debug build) the binary only says how to run it.

use mobilis_rpc::plugin_host::{CallControl, PluginHost};
use mobilis_rpc::plugin_supervisor::WorkerSettings;
use mobilis_sdk::table_ffi;
use mobilis_tests::bench::{self, compare_json, format_kib, format_seconds, peak_rss_kib, relative_difference, Timing};
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
/// Overrides `REDUCE_REPETITIONS` for the `reduce` section, so that a profiler attached
/// after the dataset is generated sees mostly the reduction.
const REPETITIONS_VARIABLE: &str = "HALL_REDUCE_REPETITIONS";

fn reduce_repetitions() -> usize {
    match std::env::var(REPETITIONS_VARIABLE) {
        Ok(text) => text.parse().ok().filter(|count: &usize| *count > 0).unwrap_or_else(|| {
            bench::fail(
                BENCH,
                &format!("{REPETITIONS_VARIABLE} must be a positive count, not {text:?}"),
            )
        }),
        Err(_) => REDUCE_REPETITIONS,
    }
}

/// The sections a run times (`HALL_REDUCE_SECTIONS`, comma-separated; all by default).
const SECTIONS_VARIABLE: &str = "HALL_REDUCE_SECTIONS";
const ALL_SECTIONS: [&str; 6] = ["reduce", "peer", "scaling", "drift", "boundary", "isolated"];

/// Goals of issue 13 for `hall.reduce` on a million readings through the ABI.
const GOAL_REDUCE_S: f64 = 40e-3;
const GOAL_READINGS_PER_S: f64 = 25e6;
/// mobilis against the vectorized numpy/pandas reduction of the same readings.
const GOAL_PEER_RATIO: f64 = 10.0;
/// The scaling section: sample counts (1e4 to 1e7 readings) and timed calls at each.
const SCALING: [(usize, usize); 4] = [(1, 31), (10, 15), (100, 7), (1000, 3)];
/// The cost per reading may grow by this factor from 1e5 to 1e7 readings and still count as
/// linear: caches and page faults make a larger table a little dearer per reading.
const LINEAR_TOLERANCE: f64 = 1.5;

fn main() {
    if !bench::invoked_as_benchmark(BENCH) {
        return;
    }
    let sections: Vec<String> = match std::env::var(SECTIONS_VARIABLE) {
        Ok(list) => list
            .split(',')
            .map(|s| s.trim().to_owned())
            .filter(|s| !s.is_empty())
            .collect(),
        Err(_) => ALL_SECTIONS.iter().map(|s| (*s).to_owned()).collect(),
    };
    if let Some(unknown) = sections.iter().find(|s| !ALL_SECTIONS.contains(&s.as_str())) {
        fail(&format!(
            "{SECTIONS_VARIABLE}: unknown section `{unknown}`; known: {}",
            ALL_SECTIONS.join(", ")
        ));
    }
    let wants = |section: &str| sections.iter().any(|s| s == section);

    let release = bench::build_release_plugins(BENCH, &["mobilis-plugin-hall", "mobilis-test-fixture"]);
    let host = bench::load_plugins(BENCH, &release, &["mobilis_hall", "test_fixture_plugin"]);

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
    let reduce_inputs = vec![
        ("readings".to_owned(), readings.clone()),
        ("samples".to_owned(), sheet.clone()),
    ];

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

    // Checked once, untimed: a figure for a call that returned the wrong thing means nothing.
    let reduced = invoke("hall.reduce", &reduce_inputs);
    save_or_compare_output(
        &reduced.table,
        &serde_json::json!({"summary": reduced.summary, "warnings": reduced.warnings}),
    );
    let output_rows = reduced.table.height();
    let flagged_rows = reduced.summary["flagged_rows"].as_i64().unwrap_or(-1);
    let flag_counts = reduced.summary["flag_counts"].to_string();
    println!("hall.reduce: {output_rows} output rows, {flagged_rows} of them flagged {flag_counts}");

    let mut reduce_timing: Option<Timing> = None;
    if wants("reduce") {
        let timing = bench::measure(WARM_UP, reduce_repetitions(), || invoke("hall.reduce", &reduce_inputs));
        println!();
        println!(
            "{:<58} {:>11} {:>11} {:>16}",
            "hall.reduce, 1e6 readings (one call)", "median", "min", "readings/s"
        );
        println!(
            "{:<58} {:>11} {:>11} {:>16.3e}",
            "(a)  hall.reduce via PluginHost::invoke",
            format_seconds(timing.median_s),
            format_seconds(timing.min_s),
            reading_count as f64 / timing.median_s
        );
        println!(
            "     goal <= {}: {}; goal >= {:.0}e6 readings/s: {}",
            format_seconds(GOAL_REDUCE_S),
            verdict(timing.median_s <= GOAL_REDUCE_S),
            GOAL_READINGS_PER_S / 1e6,
            verdict(reading_count as f64 / timing.median_s >= GOAL_READINGS_PER_S)
        );
        reduce_timing = Some(timing);
    }

    if wants("peer") {
        run_peer(&readings, &sheet, &reduced.table, reduce_timing);
    }
    drop(reduced);

    if wants("scaling") {
        scaling(
            &readings,
            &sheet,
            &|inputs| invoke("hall.reduce", inputs),
            reduce_timing,
        );
        println!(
            "peak RSS (VmHWM) after the scaling section: {}",
            format_kib(peak_rss_kib())
        );
    }

    if wants("drift") {
        drift(&readings, &sheet, &|inputs| invoke("hall.reduce", inputs));
    }
    if wants("boundary") {
        boundary(&readings, &|analysis, inputs| invoke(analysis, inputs));
    }

    if wants("isolated") {
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
        let invoke_isolated =
            |analysis: &str, inputs: &[(String, DataFrame)]| invoke_in(&isolated_host, analysis, inputs);
        let isolated_reduced = invoke_isolated("hall.reduce", &reduce_inputs);
        if isolated_reduced.table.height() != output_rows {
            fail("hall.reduce in a worker returned another number of rows than in process");
        }
        drop(isolated_reduced);
        let identity_inputs = vec![("values".to_owned(), readings.clone())];
        let reduce_isolated = bench::measure(WARM_UP, REDUCE_REPETITIONS, || {
            invoke_isolated("hall.reduce", &reduce_inputs)
        });
        let identity_isolated = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
            invoke_isolated("fixture.identity", &identity_inputs)
        });
        println!();
        header("isolated plugins (one call)");
        line(
            "(a-iso) hall.reduce in an isolated worker",
            &reduce_isolated,
            reading_count,
        );
        line(
            "(b-iso) fixture.identity in an isolated worker",
            &identity_isolated,
            reading_count,
        );
        if let Some(reduce) = reduce_timing {
            println!(
                "cost of isolation (median, isolated minus in process): hall.reduce {} per call ({:+.1} %)",
                signed(reduce_isolated.median_s - reduce.median_s),
                100.0 * (reduce_isolated.median_s / reduce.median_s - 1.0),
            );
        }
    }

    println!(
        "peak RSS (VmHWM): {} after generating the dataset, {} at the end",
        format_kib(peak_after_generation),
        format_kib(peak_rss_kib())
    );
}

fn verdict(met: bool) -> &'static str {
    if met {
        "met"
    } else {
        "NOT met"
    }
}

fn header(title: &str) {
    println!("{:<58} {:>11} {:>11} {:>16}", title, "median", "min", "readings/s");
}

fn line(label: &str, timing: &Timing, readings: usize) {
    println!(
        "{:<58} {:>11} {:>11} {:>16.3e}",
        label,
        format_seconds(timing.median_s),
        format_seconds(timing.min_s),
        readings as f64 / timing.median_s
    );
}

fn signed(seconds: f64) -> String {
    let sign = if seconds < 0.0 { "-" } else { "+" };
    format!("{sign}{}", format_seconds(seconds.abs()))
}

/// A call of an analysis through a host.
type Invoke<'a> = &'a dyn Fn(&str, &[(String, DataFrame)]) -> mobilis_rpc::plugin_host::InvokeSuccess;
/// A call of `hall.reduce` through a host.
type InvokeReduce<'a> = &'a dyn Fn(&[(String, DataFrame)]) -> mobilis_rpc::plugin_host::InvokeSuccess;

/// The boundary figures (b), (b'), (c), (c').
fn boundary(readings: &DataFrame, invoke: Invoke<'_>) {
    let numeric = readings
        .drop("sample")
        .unwrap_or_else(|error| fail(&format!("cannot drop the sample column: {error}")));
    let identity_inputs = vec![("values".to_owned(), readings.clone())];
    let numeric_inputs = vec![("values".to_owned(), numeric.clone())];
    let echoed = invoke("fixture.identity", &identity_inputs);
    if !echoed.table.equals_missing(readings) {
        fail("fixture.identity did not return its input table unchanged");
    }
    drop(echoed);
    let identity = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
        invoke("fixture.identity", &identity_inputs)
    });
    let identity_numeric = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
        invoke("fixture.identity", &numeric_inputs)
    });
    let in_process = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || round_trip(readings));
    let in_process_numeric = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || round_trip(&numeric));
    let count = readings.height();
    println!();
    header("the plugin boundary, 1e6 readings (one call)");
    line("(b)  fixture.identity via PluginHost::invoke", &identity, count);
    line(
        "(b') fixture.identity, without the sample column",
        &identity_numeric,
        count,
    );
    line("(c)  export_frame + import_frame in-process", &in_process, count);
    line(
        "(c') export_frame + import_frame, without the sample column",
        &in_process_numeric,
        count,
    );
    println!(
        "timed calls: {BOUNDARY_REPETITIONS}, each after {WARM_UP} warm-up; {} columns, {} numeric",
        readings.width(),
        numeric.width()
    );
}

/// hall.reduce at 1e4, 1e5, 1e6 and 1e7 readings. The smaller tables are the first 1 and
/// 10 samples of the dataset; the 1e7 table is the dataset tiled ten times under new sample
/// names (the readings repeat, which costs the reduction exactly what new ones would: it
/// does the same work whatever the values), so that generating it stays a matter of seconds.
fn scaling(readings: &DataFrame, sheet: &DataFrame, invoke: InvokeReduce<'_>, million: Option<Timing>) {
    let per_sample = SETPOINT_COUNT * READINGS_PER_TEMPERATURE;
    println!();
    header("hall.reduce as the readings grow (one call)");
    let mut costs: Vec<(usize, f64)> = Vec::new();
    for (samples, repetitions) in SCALING {
        let count = samples * per_sample;
        let timing = match (samples, million) {
            (SAMPLE_COUNT, Some(timing)) => timing,
            _ => {
                let (table, sample_sheet) = if samples <= SAMPLE_COUNT {
                    (readings.slice(0, count), sheet.slice(0, samples))
                } else {
                    tiled(readings, sheet, samples / SAMPLE_COUNT)
                };
                let inputs = vec![("readings".to_owned(), table), ("samples".to_owned(), sample_sheet)];
                bench::measure(WARM_UP, repetitions, || invoke(&inputs))
            }
        };
        line(
            &format!("     {count:.0e} readings ({samples} samples)", count = count as f64),
            &timing,
            count,
        );
        costs.push((count, timing.median_s / count as f64));
    }
    let cost_at = |count: usize| costs.iter().find(|(c, _)| *c == count).map(|(_, cost)| *cost);
    if let (Some(small), Some(large)) = (cost_at(10 * per_sample), cost_at(1000 * per_sample)) {
        let growth = large / small;
        println!(
            "cost per reading: {:.1} ns at 1e5 readings, {:.1} ns at 1e7 ({growth:.2}x); {}",
            small * 1e9,
            large * 1e9,
            if growth <= LINEAR_TOLERANCE {
                format!("linear (within {LINEAR_TOLERANCE}x)")
            } else {
                format!("NOT linear (more than {LINEAR_TOLERANCE}x)")
            }
        );
    }
}

/// Samples of the drifting run of the `drift` section.
const DRIFT_SAMPLE_COUNT: usize = 10;

/// hall.reduce on a run that drifts as a real cryostat does
/// ([`hall_readings::generate_drifting`]), against as many readings of the steady run: what
/// the drift correction (two passes over every drifting group, the first drafted) costs.
fn drift(readings: &DataFrame, sheet: &DataFrame, invoke: InvokeReduce<'_>) {
    let started = Instant::now();
    let (drifting, drifting_sheet) =
        hall_readings::generate_drifting(DRIFT_SAMPLE_COUNT).unwrap_or_else(|message| fail(&message));
    let generation_s = started.elapsed().as_secs_f64();
    let count = drifting.height();
    let drifting_inputs = vec![
        ("readings".to_owned(), drifting),
        ("samples".to_owned(), drifting_sheet),
    ];
    let reduced = invoke(&drifting_inputs);
    let corrected = reduced
        .table
        .column("drift_corrected")
        .and_then(|column| column.bool().cloned())
        .map(|flags| flags.sum().unwrap_or(0))
        .unwrap_or_else(|error| fail(&format!("drift_corrected column: {error}")));
    println!();
    println!(
        "drifting run: {count} readings ({DRIFT_SAMPLE_COUNT} samples, stage drift 30 mK between readings), generated in {generation_s:.2} s; {corrected} of {} rows drift-corrected",
        reduced.table.height()
    );
    header("hall.reduce, drifting against steady readings (one call)");
    let drifting_timing = bench::measure(WARM_UP, REDUCE_REPETITIONS, || invoke(&drifting_inputs));
    line("     drifting run", &drifting_timing, count);
    let steady_inputs = vec![
        ("readings".to_owned(), readings.slice(0, count)),
        ("samples".to_owned(), sheet.slice(0, DRIFT_SAMPLE_COUNT)),
    ];
    let steady_timing = bench::measure(WARM_UP, REDUCE_REPETITIONS, || invoke(&steady_inputs));
    line("     steady run, the same number of readings", &steady_timing, count);
    println!(
        "the drift correction costs {:.2}x the steady reduction",
        drifting_timing.median_s / steady_timing.median_s
    );
}

/// The dataset repeated `copies` times; copy k renames sample "Si-NNN" to "Si-kNNN" (sorted
/// like the copies), in the readings and in the sheet.
fn tiled(readings: &DataFrame, sheet: &DataFrame, copies: usize) -> (DataFrame, DataFrame) {
    let rename = |frame: &DataFrame, copy: usize| -> DataFrame {
        let names = frame
            .column("sample")
            .and_then(|c| c.str().cloned())
            .unwrap_or_else(|error| fail(&format!("sample column: {error}")));
        let renamed: Vec<String> = names
            .iter()
            .map(|name| format!("Si-{copy}{}", &name.unwrap_or("")[3..]))
            .collect();
        let mut frame = frame.clone();
        frame
            .with_column(Column::new("sample".into(), renamed))
            .unwrap_or_else(|error| fail(&format!("cannot rename the samples: {error}")));
        frame
    };
    let mut table = rename(readings, 0);
    let mut sample_sheet = rename(sheet, 0);
    for copy in 1..copies {
        table
            .vstack_mut(&rename(readings, copy))
            .unwrap_or_else(|error| fail(&format!("cannot tile the readings: {error}")));
        sample_sheet
            .vstack_mut(&rename(sheet, copy))
            .unwrap_or_else(|error| fail(&format!("cannot tile the sheet: {error}")));
    }
    table.rechunk_mut();
    sample_sheet.rechunk_mut();
    (table, sample_sheet)
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

/// Environment variables of the result check: the bench writes the output of `hall.reduce`
/// on its dataset (every column, exact to the last bit, and the summary) to the file named by
/// the first, and compares it with the file named by the second, column by column.
const SAVE_OUTPUT_VARIABLE: &str = "HALL_REDUCE_SAVE_OUTPUT";
const COMPARE_OUTPUT_VARIABLE: &str = "HALL_REDUCE_COMPARE_OUTPUT";
/// The largest relative difference of a number allowed between two versions of the
/// reduction (the project's rule for a change that is meant to leave results alone).
const LARGEST_RELATIVE_CHANGE: f64 = 1e-12;

/// A table and summary as JSON, every cell a string (floats in Rust's shortest exact
/// form, so that they read back bit for bit) or null.
fn output_as_json(table: &DataFrame, summary: &serde_json::Value) -> serde_json::Value {
    serde_json::json!({"columns": bench::columns_as_json(table), "summary": summary})
}

/// Writes and compares the reduction's output as the environment asks (see
/// [`SAVE_OUTPUT_VARIABLE`]); a mismatch stops the bench.
fn save_or_compare_output(table: &DataFrame, summary: &serde_json::Value) {
    let saved_path = std::env::var_os(SAVE_OUTPUT_VARIABLE);
    let compare_path = std::env::var_os(COMPARE_OUTPUT_VARIABLE);
    if saved_path.is_none() && compare_path.is_none() {
        return;
    }
    let now = output_as_json(table, summary);
    if let Some(path) = saved_path {
        std::fs::write(&path, now.to_string())
            .unwrap_or_else(|error| fail(&format!("cannot write {}: {error}", path.to_string_lossy())));
        println!("output of hall.reduce saved to {}", path.to_string_lossy());
    }
    let Some(path) = compare_path else { return };
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|error| fail(&format!("cannot read {}: {error}", path.to_string_lossy())));
    let saved: serde_json::Value =
        serde_json::from_str(&text).unwrap_or_else(|error| fail(&format!("{}: {error}", path.to_string_lossy())));
    let mut problems = Vec::new();
    let summary_change = compare_json("summary", &saved["summary"], &now["summary"], &mut problems);
    let empty = Vec::new();
    let saved_columns = saved["columns"].as_array().unwrap_or(&empty);
    let now_columns = now["columns"].as_array().unwrap_or(&empty);
    if saved_columns.len() != now_columns.len() {
        problems.push(format!("{} columns then {}", saved_columns.len(), now_columns.len()));
    }
    let mut largest = summary_change;
    let mut largest_column = "summary".to_owned();
    for (saved_column, now_column) in saved_columns.iter().zip(now_columns) {
        let name = saved_column["name"].as_str().unwrap_or("?");
        if now_column["name"] != saved_column["name"] || now_column["dtype"] != saved_column["dtype"] {
            problems.push(format!(
                "column {name}: name or type changed to {} {}",
                now_column["name"], now_column["dtype"]
            ));
            continue;
        }
        let (Some(a), Some(b)) = (saved_column["values"].as_array(), now_column["values"].as_array()) else {
            continue;
        };
        if a.len() != b.len() {
            problems.push(format!("column {name}: {} rows then {}", a.len(), b.len()));
            continue;
        }
        let is_float = saved_column["dtype"] == "f64";
        let mut column_largest = 0.0_f64;
        for (row, (a, b)) in a.iter().zip(b).enumerate() {
            match (a.as_str(), b.as_str()) {
                (Some(x), Some(y)) if is_float => {
                    let (x, y): (f64, f64) = (x.parse().unwrap_or(f64::NAN), y.parse().unwrap_or(f64::NAN));
                    column_largest = column_largest.max(relative_difference(x, y));
                }
                _ if a == b => {}
                _ => problems.push(format!("column {name}, row {row}: {a} then {b}")),
            }
        }
        if column_largest > largest {
            largest = column_largest;
            largest_column = name.to_owned();
        }
    }
    for problem in problems.iter().take(20) {
        eprintln!("  {problem}");
    }
    println!(
        "output compared with {}: largest relative difference {largest:.3e} (column {largest_column}; goal <= {LARGEST_RELATIVE_CHANGE:e}), {} nulls, texts, flags or counts differ",
        path.to_string_lossy(),
        problems.len()
    );
    if largest > LARGEST_RELATIVE_CHANGE || !problems.is_empty() {
        fail("the output of hall.reduce changed");
    }
}

/// The peer script next to this file.
const PEER_SCRIPT: &str = "hall_reduce_peer.py";
const PEER_REPETITIONS: usize = 5;
/// Output rows whose densities and mobilities are printed beside the peer's.
const PEER_CHECK_ROWS: [usize; 4] = [0, 15_000, 40_000, 62_499];

/// Runs the numpy/pandas peer on the same readings when `python3` with numpy and pandas is
/// present, and prints its time, the ratio and a few of its densities next to mobilis's.
fn run_peer(readings: &DataFrame, sheet: &DataFrame, reduced: &DataFrame, mobilis: Option<Timing>) {
    println!();
    let directory = tempfile::tempdir().unwrap_or_else(|error| fail(&format!("temporary directory: {error}")));
    write_peer_input(directory.path(), readings, sheet);
    let script = mobilis_tests::workspace_root().join("tests/benches").join(PEER_SCRIPT);
    let output = std::process::Command::new("python3")
        .arg(&script)
        .arg(directory.path())
        .arg(PEER_REPETITIONS.to_string())
        .output();
    let output = match output {
        Ok(output) => output,
        Err(error) => {
            println!("numpy peer: not run, python3 is not available ({error})");
            return;
        }
    };
    let stdout = String::from_utf8_lossy(&output.stdout);
    let report: Option<serde_json::Value> = stdout.lines().last().and_then(|line| serde_json::from_str(line).ok());
    let Some(report) = report.clone().filter(|report| report.get("median_s").is_some()) else {
        let reason = report
            .and_then(|report| report["error"].as_str().map(str::to_owned))
            .unwrap_or_else(|| String::from_utf8_lossy(&output.stderr).trim().to_owned());
        println!("numpy peer: not run ({reason})");
        return;
    };
    let peer_s = report["median_s"].as_f64().unwrap_or(f64::NAN);
    println!(
        "numpy peer ({PEER_SCRIPT}, numpy {}, pandas {}): median {}, min {} over {} runs, {} rows, file reading not timed",
        report["numpy"].as_str().unwrap_or("?"),
        report["pandas"].as_str().unwrap_or("?"),
        format_seconds(peer_s),
        format_seconds(report["min_s"].as_f64().unwrap_or(f64::NAN)),
        report["repetitions"],
        report["rows"]
    );
    if let Some(mobilis) = mobilis {
        let ratio = peer_s / mobilis.median_s;
        println!(
            "mobilis (a) against the peer: {ratio:.1}x faster (goal >= {GOAL_PEER_RATIO:.0}x): {}",
            verdict(ratio >= GOAL_PEER_RATIO)
        );
    }
    let float = |name: &str, row: usize| -> f64 {
        reduced
            .column(name)
            .ok()
            .and_then(|c| c.f64().ok().and_then(|c| c.get(row)))
            .unwrap_or(f64::NAN)
    };
    let text = |name: &str, row: usize| -> String {
        reduced
            .column(name)
            .ok()
            .and_then(|c| c.str().ok().and_then(|c| c.get(row).map(str::to_owned)))
            .unwrap_or_default()
    };
    println!("sanity check, the same rows: sample, T, density mobilis / peer, Hall mobility mobilis / peer");
    for check in report["checks"].as_array().into_iter().flatten() {
        let row = check["row"].as_u64().unwrap_or(0) as usize;
        let (density, peer_density) = (
            float("density_m3", row),
            check["density_m3"].as_f64().unwrap_or(f64::NAN),
        );
        let (mobility, peer_mobility) = (
            float("hall_mobility_m2_per_Vs", row),
            check["hall_mobility_m2_per_Vs"].as_f64().unwrap_or(f64::NAN),
        );
        let same_row = text("sample", row) == check["sample"].as_str().unwrap_or("")
            && (float("temperature_K", row) - check["temperature_K"].as_f64().unwrap_or(f64::NAN)).abs() < 1e-9;
        println!(
            "  {} {:8.3} K  {:.4e} / {:.4e} m^-3 ({:+.2} %)  {:.5} / {:.5} m^2/Vs ({:+.2} %){}",
            text("sample", row),
            float("temperature_K", row),
            density,
            peer_density,
            100.0 * (peer_density / density - 1.0),
            mobility,
            peer_mobility,
            100.0 * (peer_mobility / mobility - 1.0),
            if same_row { "" } else { "  (NOT the same row!)" }
        );
    }
}

/// The readings as raw little-endian columns and a JSON sidecar, a form numpy reads without
/// pyarrow (see the peer script).
fn write_peer_input(directory: &std::path::Path, readings: &DataFrame, sheet: &DataFrame) {
    let write = |name: &str, bytes: Vec<u8>| {
        std::fs::write(directory.join(format!("{name}.bin")), bytes)
            .unwrap_or_else(|error| fail(&format!("cannot write the peer's {name}: {error}")));
    };
    let names: Vec<String> = sheet
        .column("sample")
        .and_then(|c| c.str().cloned())
        .unwrap_or_else(|error| fail(&format!("sheet: {error}")))
        .iter()
        .map(|name| name.unwrap_or("").to_owned())
        .collect();
    let index_of: std::collections::HashMap<&str, u32> = names
        .iter()
        .enumerate()
        .map(|(index, name)| (name.as_str(), index as u32))
        .collect();
    let samples = readings
        .column("sample")
        .and_then(|c| c.str().cloned())
        .unwrap_or_else(|error| fail(&format!("readings: {error}")));
    write(
        "sample_index",
        samples
            .iter()
            .flat_map(|name| index_of[name.unwrap_or("")].to_le_bytes())
            .collect(),
    );
    for name in ["temperature_K", "field_T", "current_A", "voltage_V"] {
        let values = readings
            .column(name)
            .and_then(|c| c.f64().cloned())
            .unwrap_or_else(|e| fail(&e.to_string()));
        write(name, values.into_no_null_iter().flat_map(f64::to_le_bytes).collect());
    }
    for name in ["i_in", "i_out", "v_pos", "v_neg"] {
        let values = readings
            .column(name)
            .and_then(|c| c.i64().cloned())
            .unwrap_or_else(|e| fail(&e.to_string()));
        write(name, values.into_no_null_iter().flat_map(i64::to_le_bytes).collect());
    }
    let sheet_floats = |name: &str| -> Vec<f64> {
        sheet
            .column(name)
            .and_then(|c| c.f64().cloned())
            .unwrap_or_else(|e| fail(&e.to_string()))
            .into_no_null_iter()
            .collect()
    };
    let meta = serde_json::json!({
        "rows": readings.height(),
        "samples": names,
        "thickness_m": sheet_floats("thickness_m"),
        "hall_factor": sheet_floats("hall_factor"),
        "check_rows": PEER_CHECK_ROWS,
    });
    std::fs::write(directory.join("meta.json"), meta.to_string())
        .unwrap_or_else(|error| fail(&format!("cannot write the peer's meta.json: {error}")));
}
