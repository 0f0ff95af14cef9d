//! The plugin boundary, end to end: a plugin written in C and built here with the system C
//! compiler, the refusal of unusable libraries, and the Rust fixture plugin
//! (`tests/fixture-plugin`) for panics, parameter validation, cancellation and missing
//! columns. Each test runs its own `mobilisd`, with a plugin directory that holds exactly
//! the libraries the test is about, twice: once as `--trusted-plugin-dir` (in process) and
//! once as `--plugin-dir` (isolated in worker processes); two tests differ: one checks the
//! daemon's default plugin scan, and one calls the C plugin in process through the host's
//! loader, with tables a daemon would never send.
//!
//! The C libraries are compiled from `tests/c-plugin/cfixture.c` by
//! [`mobilis_tests::c_plugin`], once per set of definitions.

use mobilis_client::{Client, ClientError};
use mobilis_rpc::plugin_host::{CallControl, PluginHost};
use mobilis_sdk::abi;
use mobilis_tests::c_plugin::{build_c_plugin, shared_library_name, Defines};
use mobilis_tests::{fixture_plugin_dir, float_column, plugin_library, TestDaemon};
use polars::prelude::{Column, DataFrame};
use serde_json::{json, Value};
use std::path::Path;
use std::sync::Arc;
use std::time::{Duration, Instant};

/// Part of the message `fixture.panic` panics with (see `tests/fixture-plugin`).
const FIXTURE_PANIC_TEXT: &str = "deliberate panic 7e3f";

/// Where the daemon runs the plugins of a test's directory.
#[derive(Clone, Copy, Debug)]
enum Mode {
    /// `--trusted-plugin-dir`: in the daemon's process.
    InProcess,
    /// `--plugin-dir`: in supervised worker processes.
    Isolated,
}

/// A daemon loading the plugins of `dir` only, in `mode`.
async fn daemon_with_plugins(dir: &Path, mode: Mode) -> TestDaemon {
    let dir = dir.to_owned();
    TestDaemon::start_with(move |options| match mode {
        Mode::InProcess => options
            .extra_arguments
            .extend(["--trusted-plugin-dir".to_owned(), dir.display().to_string()]),
        Mode::Isolated => options.plugin_dirs.push(dir),
    })
    .await
}

/// Runs a test of the plugin boundary once with the plugins in process and once isolated:
/// the ABI is the same in both, and so must be everything a client sees.
macro_rules! in_both_modes {
    ($($test:ident),* $(,)?) => {$(
        mod $test {
            #[tokio::test(flavor = "multi_thread")]
            async fn in_process() {
                super::$test(super::Mode::InProcess).await
            }
            #[tokio::test(flavor = "multi_thread")]
            async fn isolated() {
                super::$test(super::Mode::Isolated).await
            }
        }
    )*};
}

/// The `dataset.list` answer, sorted by name, for before/after comparisons.
async fn dataset_list(daemon: &TestDaemon) -> Vec<Value> {
    let mut list = daemon.call("dataset.list", json!({})).await["datasets"]
        .as_array()
        .expect("dataset.list returns a page of datasets")
        .clone();
    list.sort_by_key(|entry| entry["name"].as_str().unwrap_or_default().to_owned());
    list
}

/// Imports `columns` as dataset `name`, runs `cfixture.sum` on it into `NAME_sum`, and
/// returns the run's answer and the output's rows.
async fn c_sum(daemon: &TestDaemon, name: &str, columns: Value) -> (Value, Value) {
    daemon
        .call("dataset.import", json!({"name": name, "columns": columns}))
        .await;
    let output = format!("{name}_sum");
    let run = daemon
        .call(
            "analysis.run",
            json!({"analysis": "cfixture.sum", "inputs": {"values": name}, "output": output}),
        )
        .await;
    let page = daemon.call("dataset.rows", json!({"name": output})).await;
    (run, page)
}

fn file_name_of(path: &str) -> &str {
    Path::new(path).file_name().and_then(|n| n.to_str()).unwrap_or_default()
}

async fn the_c_plugin_loads_and_sums_a_column_with_nulls(mode: Mode) {
    let dir = tempfile::tempdir().unwrap();
    build_c_plugin(dir.path(), "cfixture", &[]);
    let daemon = daemon_with_plugins(dir.path(), mode).await;

    let plugins = daemon.call("plugin.list", json!({})).await;
    let plugins = plugins.as_array().unwrap();
    assert_eq!(plugins.len(), 1, "{plugins:?}");
    assert_eq!(plugins[0]["name"], "cfixture");
    assert_eq!(plugins[0]["analyses"], json!(["cfixture.sum"]));
    let isolation = match mode {
        Mode::InProcess => "in_process",
        Mode::Isolated => "isolated",
    };
    assert_eq!(plugins[0]["isolation"], isolation, "{plugins:?}");
    assert_eq!(
        file_name_of(plugins[0]["library"].as_str().unwrap()),
        shared_library_name("cfixture")
    );
    let described = daemon
        .call("analysis.describe", json!({"analysis": "cfixture.sum"}))
        .await;
    assert_eq!(described["inputs"][0]["role"], "values");
    assert_eq!(described["inputs"][0]["columns"][0]["name"], "x");
    assert_eq!(described["outputs"][1]["dtype"], "i64");

    // A text column next to `x`: the plugin must find `x` among other children and skip a
    // large UTF-8 child it does not read.
    let (run, page) = c_sum(
        &daemon,
        "small",
        json!({"label": ["a", "b", "c", "d"], "x": [1.5, null, 2.25, 4.0]}),
    )
    .await;
    assert_eq!(run["rows"], 1);
    assert_eq!(run["summary"]["total"].as_f64(), Some(7.75));
    assert_eq!(run["warnings"], json!([]));
    assert_eq!(float_column(&page, "total"), vec![Some(7.75)]);
    assert_eq!(page["columns"]["count"], json!([3]));

    // More rows than one byte of the validity bitmap holds, with nulls at irregular places,
    // so that a wrong bit or byte index shows in the total.
    let values: Vec<Value> = (0..1000)
        .map(|i| if i % 7 == 3 { Value::Null } else { json!(i as f64 * 0.5) })
        .collect();
    let expected_total: f64 = (0..1000).filter(|i| i % 7 != 3).map(|i| i as f64 * 0.5).sum();
    let expected_count = (0..1000).filter(|i| i % 7 != 3).count();
    let (run, page) = c_sum(&daemon, "large", json!({"x": values})).await;
    assert_eq!(run["summary"]["total"].as_f64(), Some(expected_total));
    assert_eq!(page["columns"]["count"], json!([expected_count]));

    // Integers are converted by the host to the declared float64 before the call.
    let (run, _) = c_sum(&daemon, "whole", json!({"x": [1, 2, 3]})).await;
    assert_eq!(run["summary"]["total"].as_f64(), Some(6.0));
}

async fn unusable_libraries_are_refused_by_name_and_the_daemon_keeps_serving(mode: Mode) {
    // Each refused library: its name, how it is built, and the words its reason carries.
    let refusals: [(&str, Defines, Vec<String>); 5] = [
        // Both ABI versions, the plugin's and the daemon's.
        (
            "cfixture_abi2",
            &[("FIXTURE_ABI_MAJOR", Some("2"))],
            vec![
                format!("ABI 2.{}", abi::ABI_MINOR),
                format!("ABI {}.{}", abi::ABI_MAJOR, abi::ABI_MINOR),
            ],
        ),
        (
            "cfixture_no_entry",
            &[("FIXTURE_NO_ENTRY", None)],
            vec![abi::ENTRY_SYMBOL.to_owned()],
        ),
        // The plugin, its file and the NULL function.
        (
            "cfixture_null_invoke",
            &[("FIXTURE_NULL_FUNCTION", Some("invoke"))],
            vec![format!(
                "plugin `cfixture` ({}): `invoke` is NULL",
                shared_library_name("cfixture_null_invoke")
            )],
        ),
        (
            "cfixture_versions_only",
            &[("FIXTURE_VERSIONS_ONLY", None)],
            vec![format!("ABI {}.0", abi::ABI_MAJOR + 1)],
        ),
        // Loaded after `libcfixture` (the daemon loads a directory in file name order), so
        // this is the copy that finds `cfixture.sum` taken; the reason names the library that
        // provides it.
        (
            "cfixture_copy",
            &[("FIXTURE_PLUGIN_NAME", Some("cfixture_copy"))],
            vec![
                "`cfixture.sum`".to_owned(),
                "already provided".to_owned(),
                shared_library_name("cfixture"),
            ],
        ),
    ];
    let dir = tempfile::tempdir().unwrap();
    build_c_plugin(dir.path(), "cfixture", &[]);
    for (name, defines, _) in &refusals {
        build_c_plugin(dir.path(), name, defines);
    }
    let daemon = daemon_with_plugins(dir.path(), mode).await;

    let info = daemon.call("server.info", json!({})).await;
    assert_eq!(info["plugins"].as_array().unwrap().len(), 1, "{info}");
    assert_eq!(info["plugins"][0]["name"], "cfixture");
    let refused = info["refused_plugins"].as_array().expect("refused_plugins is a list");
    let reason_for = |name: &str| -> String {
        let file = shared_library_name(name);
        let entry = refused
            .iter()
            .find(|entry| file_name_of(entry["file"].as_str().unwrap_or_default()) == file)
            .unwrap_or_else(|| panic!("{file} is not among the refused libraries: {refused:?}"));
        entry["reason"].as_str().expect("a reason").to_owned()
    };
    assert_eq!(refused.len(), refusals.len(), "{refused:?}");
    for (name, _, words) in &refusals {
        let reason = reason_for(name);
        for word in words {
            assert!(reason.contains(word.as_str()), "{name}: `{reason}` lacks `{word}`");
        }
    }

    let (run, _) = c_sum(&daemon, "v", json!({"x": [1.0, 2.0]})).await;
    assert_eq!(run["summary"]["total"].as_f64(), Some(3.0));
}

/// A descriptor is read field by field under the ABI's minor-version rule: a C plugin that
/// leaves any of its three functions NULL is refused with the field's name before anything
/// is called, and one of another major version is refused from its two version fields
/// alone (the fixture's descriptor has nothing after them). Loaded in process through the
/// host's loader, where a wrong read would be undefined behaviour in the test itself.
#[test]
fn c_descriptors_with_a_null_function_or_another_major_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    for field in ["describe", "invoke", "release_string"] {
        let name = format!("cfixture_null_{field}");
        let library = build_c_plugin(dir.path(), &name, &[("FIXTURE_NULL_FUNCTION", Some(field))]);
        let mut host = PluginHost::default();
        let reason = host.load(&library).expect_err("a NULL function refuses the library");
        assert_eq!(
            reason,
            format!(
                "plugin `cfixture` ({}): `{field}` is NULL; a plugin must set describe, invoke and release_string in its descriptor",
                shared_library_name(&name)
            )
        );
        assert!(host.plugins.is_empty() && host.analyses.is_empty());
    }

    let library = build_c_plugin(dir.path(), "cfixture_versions_only", &[("FIXTURE_VERSIONS_ONLY", None)]);
    let reason = PluginHost::default()
        .load(&library)
        .expect_err("another major is refused");
    assert_eq!(
        reason,
        format!(
            "built for plugin ABI {}.0, this daemon speaks ABI {}.{}; rebuild the plugin against this version",
            abi::ABI_MAJOR + 1,
            abi::ABI_MAJOR,
            abi::ABI_MINOR
        )
    );
}

async fn a_panic_in_a_plugin_is_an_error_and_the_plugin_keeps_working(mode: Mode) {
    let dir = fixture_plugin_dir();
    let daemon = daemon_with_plugins(dir.path(), mode).await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "v", "columns": {"x": [1.0, 2.0, null, 3.0]}}),
        )
        .await;
    let before = dataset_list(&daemon).await;
    let rows_before = daemon.call("dataset.rows", json!({"name": "v"})).await;

    // Twice: a plugin that panicked once must still be able to panic cleanly again.
    for attempt in 0..2 {
        daemon
            .call_refused(
                "analysis.run",
                json!({"analysis": "fixture.panic", "inputs": {"values": "v"}, "output": format!("never_{attempt}")}),
                5001,
                &[FIXTURE_PANIC_TEXT],
            )
            .await;
    }

    // The panic dropped the plugin's copy of the input; the stored dataset is untouched.
    assert_eq!(dataset_list(&daemon).await, before);
    assert_eq!(daemon.call("dataset.rows", json!({"name": "v"})).await, rows_before);

    let run = daemon
        .call(
            "analysis.run",
            json!({"analysis": "fixture.scale", "inputs": {"values": "v"}, "params": {"factor": 2.0}, "output": "scaled"}),
        )
        .await;
    assert_eq!(run["summary"]["sum"], json!(12.0));
    let page = daemon.call("dataset.rows", json!({"name": "scaled"})).await;
    assert_eq!(
        float_column(&page, "x_scaled"),
        vec![Some(2.0), Some(4.0), None, Some(6.0)]
    );
}

/// `fixture.undeclared` builds its table by hand with a column it does not declare: the
/// host's check of outputs refuses it, whatever SDK built it, and names the column.
async fn an_output_that_breaks_its_declaration_is_refused_and_nothing_is_stored(mode: Mode) {
    let dir = fixture_plugin_dir();
    let daemon = daemon_with_plugins(dir.path(), mode).await;
    daemon
        .call("dataset.import", json!({"name": "v", "columns": {"x": [1.0, 2.0]}}))
        .await;
    let before = dataset_list(&daemon).await;
    daemon
        .call_refused(
            "analysis.run",
            json!({"analysis": "fixture.undeclared", "inputs": {}, "output": "undeclared"}),
            5001,
            &[
                "plugin `fixture`",
                "fixture.undeclared",
                "`not_in_the_declaration` is not declared",
            ],
        )
        .await;
    assert_eq!(dataset_list(&daemon).await, before, "a refused output stored nothing");
    let run = daemon
        .call(
            "analysis.run",
            json!({"analysis": "fixture.scale", "inputs": {"values": "v"}, "params": {"factor": 2.0}, "output": "scaled"}),
        )
        .await;
    assert_eq!(run["summary"]["sum"], json!(6.0));
}

async fn bad_parameters_are_refused_before_the_plugin_runs(mode: Mode) {
    let dir = fixture_plugin_dir();
    let daemon = daemon_with_plugins(dir.path(), mode).await;
    daemon
        .call("dataset.import", json!({"name": "v", "columns": {"x": [1.0, 2.0]}}))
        .await;
    let before = dataset_list(&daemon).await;

    // The code is the host's (4001, invalid params), not the one a plugin's own refusal gets
    // (4007), and the message uses the host validator's words: the plugin was not called.
    let cases = [
        (json!({}), "params.factor is required"),
        (json!({"factor": "2"}), "params.factor must be number"),
        (
            json!({"factor": 2.0, "fatcor": 2.0}),
            "params.fatcor is not a known parameter",
        ),
    ];
    for (params, expected) in cases {
        daemon
            .call_refused(
                "analysis.run",
                json!({"analysis": "fixture.scale", "inputs": {"values": "v"}, "params": params, "output": "scaled"}),
                4001,
                &[expected],
            )
            .await;
    }
    assert_eq!(dataset_list(&daemon).await, before, "a refused call stored nothing");
}

async fn a_running_analysis_is_cancelled_from_another_connection(mode: Mode) {
    let dir = fixture_plugin_dir();
    let daemon = daemon_with_plugins(dir.path(), mode).await;
    let call_id = "wait-to-cancel";

    // The long call runs on its own connection, as a client waiting for it would.
    let runner = Client::connect(daemon.daemon.url(), None).await.unwrap();
    let started = Instant::now();
    let running = tokio::spawn(async move {
        runner
            .call(
                "analysis.run",
                json!({"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": 120}, "output": "waited", "call_id": call_id}),
            )
            .await
    });

    // Wait until the plugin has reported progress: the call is then inside the plugin's loop.
    let deadline = Instant::now() + Duration::from_secs(60);
    loop {
        let progress = daemon.call("analysis.progress", json!({"call_id": call_id})).await;
        if progress["running"] == true && progress["fraction"].is_number() {
            assert_eq!(progress["message"], "waiting");
            break;
        }
        assert!(!running.is_finished(), "fixture.wait ended before it was cancelled");
        assert!(
            Instant::now() < deadline,
            "fixture.wait never reported progress: {progress}"
        );
        tokio::time::sleep(Duration::from_millis(20)).await;
    }

    let cancel = daemon.call("analysis.cancel", json!({"call_id": call_id})).await;
    assert_eq!(cancel["cancelled"], true, "{cancel}");
    let outcome = tokio::time::timeout(Duration::from_secs(30), running)
        .await
        .expect("the cancelled call ends promptly")
        .expect("the calling task does not panic");
    match outcome {
        Err(ClientError::Rpc { code, message, .. }) => {
            assert_eq!(code, 5003, "{message}");
            assert!(message.contains("fixture.wait"), "{message}");
        }
        other => panic!("expected the cancelled error, got {other:?}"),
    }
    assert!(
        started.elapsed() < Duration::from_secs(100),
        "the call ran its full time instead of stopping"
    );

    let progress = daemon.call("analysis.progress", json!({"call_id": call_id})).await;
    assert_eq!(progress["running"], false, "{progress}");
    assert!(
        dataset_list(&daemon).await.is_empty(),
        "a cancelled call stores nothing"
    );
    let run = daemon
        .call(
            "analysis.run",
            json!({"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": 0.05}, "output": "short"}),
        )
        .await;
    assert_eq!(run["rows"], 1);
}

async fn a_missing_or_mistyped_required_column_is_named(mode: Mode) {
    let dir = fixture_plugin_dir();
    let daemon = daemon_with_plugins(dir.path(), mode).await;
    // (dataset, its columns, the words the refusal carries): the column, and the dataset
    // where it is missing.
    let cases = [
        ("no_x", json!({"y": [1.0, 2.0]}), &["`x`", "no_x"][..]),
        ("text_x", json!({"x": ["1", "2"]}), &["`x`"][..]),
    ];
    for (name, columns, words) in cases {
        daemon
            .call("dataset.import", json!({"name": name, "columns": columns}))
            .await;
        daemon
            .call_refused(
                "analysis.run",
                json!({"analysis": "fixture.scale", "inputs": {"values": name}, "params": {"factor": 2.0}, "output": "scaled"}),
                4004,
                words,
            )
            .await;
    }
}

#[tokio::test(flavor = "multi_thread")]
async fn the_fixture_plugin_is_not_loaded_by_default() {
    // The default scan next to the binary, where cargo also puts the fixture library.
    plugin_library("test_fixture_plugin");
    let daemon = TestDaemon::start().await;
    let plugins = daemon.call("plugin.list", json!({})).await;
    let names: Vec<&str> = plugins
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|plugin| plugin["name"].as_str())
        .collect();
    assert!(names.contains(&"hall"), "the default plugins should load: {names:?}");
    assert!(!names.contains(&"fixture"), "{names:?}");
}

/// Named input tables of an in-process call.
type Inputs = Vec<(String, DataFrame)>;

/// A one-column table for the in-process calls below.
fn table(column: Column) -> DataFrame {
    DataFrame::new(column.len(), vec![column]).unwrap()
}

/// The C plugin's own input checks, which a daemon never lets a table reach (it checks
/// declared columns first): called in process through the host's plugin loader.
#[test]
fn the_c_plugin_refuses_unusable_tables_itself() {
    let dir = tempfile::tempdir().unwrap();
    let library = build_c_plugin(dir.path(), "cfixture", &[]);
    let mut host = PluginHost::default();
    host.load(&library).expect("the C plugin loads");
    let control = Arc::new(CallControl::default());
    let params = json!({});
    let call = |analysis: &str, inputs: Vec<(String, DataFrame)>| host.invoke(analysis, &params, &inputs, &control);

    // (case, inputs, the words the plugin's refusal carries); each is invalid input.
    let cases: [(&str, Inputs, &[&str]); 3] = [
        (
            "no column x",
            vec![("values".into(), table(Column::new("y".into(), [1.0, 2.0])))],
            &["`x`"],
        ),
        // The format it wants and the Arrow format it got (`l`, int64).
        (
            "x of integers",
            vec![("values".into(), table(Column::new("x".into(), [1i64, 2])))],
            &["float64", "\"l\""],
        ),
        ("no input table", Vec::new(), &["values"]),
    ];
    for (case, inputs, words) in cases {
        let failure = call("cfixture.sum", inputs)
            .err()
            .unwrap_or_else(|| panic!("{case}: accepted"));
        assert_eq!(failure.status, abi::STATUS_INVALID_INPUT, "{case}: {}", failure.message);
        for word in words {
            assert!(
                failure.message.contains(word),
                "{case}: `{}` lacks `{word}`",
                failure.message
            );
        }
    }

    let x = table(Column::new("x".into(), [Some(1.0), None, Some(2.5)]));
    let success = call("cfixture.sum", vec![("values".into(), x)])
        .map_err(|failure| failure.message)
        .unwrap();
    assert_eq!(success.summary["total"].as_f64(), Some(3.5));
    assert_eq!(success.table.column("total").unwrap().f64().unwrap().get(0), Some(3.5));
    assert_eq!(success.table.column("count").unwrap().i64().unwrap().get(0), Some(2));
    // Dropping the table runs the plugin's release callbacks.
    drop(success);
}

async fn a_pipeline_pushes_its_progress_over_websocket_step_by_step(mode: Mode) {
    let dir = fixture_plugin_dir();
    let daemon = daemon_with_plugins(dir.path(), mode).await;
    let steps = json!([
        {"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": 0.5}, "output": "first"},
        {"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": 0.5}, "output": "second"}
    ]);
    let mut events = Vec::new();
    let result = daemon
        .client
        .call_with_progress("pipeline.run", json!({"steps": steps}), |event| {
            events.push(event.clone())
        })
        .await
        .expect("the pipeline runs");
    assert_eq!(result["steps"].as_array().map(Vec::len), Some(2));

    use mobilis_client::ProgressEvent;
    assert!(
        matches!(&events[0], ProgressEvent::Begin { title, .. } if title.contains("2 steps")),
        "{events:?}"
    );
    assert!(
        matches!(events.last(), Some(ProgressEvent::End { outcome, .. }) if outcome == "done"),
        "{events:?}"
    );
    let reports: Vec<(f64, &str)> = events
        .iter()
        .filter_map(|e| match e {
            ProgressEvent::Report { fraction, message, .. } => Some((*fraction, message.as_str())),
            _ => None,
        })
        .collect();
    assert!(
        reports.windows(2).all(|w| w[0].0 <= w[1].0),
        "fractions never go back: {reports:?}"
    );
    // Each step covers its half of the whole, and says which step it is.
    let first = reports
        .iter()
        .filter(|(_, m)| m.starts_with("step 1 of 2 (fixture.wait)"));
    let second: Vec<_> = reports
        .iter()
        .filter(|(_, m)| m.starts_with("step 2 of 2 (fixture.wait)"))
        .collect();
    assert!(first.clone().all(|(f, _)| *f <= 0.5), "{reports:?}");
    assert!(first.count() >= 1 && !second.is_empty(), "{reports:?}");
    assert!(second.iter().all(|(f, _)| *f >= 0.5), "{reports:?}");

    // A call_id inside a step is refused with what to do instead; a running id is refused too.
    daemon
        .call_refused(
            "pipeline.run",
            json!({"steps": [{"analysis": "fixture.wait", "inputs": {}, "output": "x", "call_id": "inner"}]}),
            4001,
            &["cannot carry its own call_id"],
        )
        .await;
}

/// Text for the string-view tests: nulls, strings short enough to live inside their view
/// (at most 12 bytes) and longer ones in the data buffers; with the byte length and number
/// of the non-null ones.
fn text_values(rows: usize) -> (Vec<Option<String>>, f64, i64) {
    let values: Vec<Option<String>> = (0..rows)
        .map(|i| match i % 7 {
            3 => None,
            0 | 2 => Some(format!("s{i}")),
            _ => Some(format!("a sample name long enough to need a data buffer, row {i}")),
        })
        .collect();
    let total = values.iter().flatten().map(|text| text.len() as f64).sum();
    let count = values.iter().flatten().count() as i64;
    (values, total, count)
}

/// ABI 1.1: a plugin that declared `string_views` gets text as Arrow string views, read
/// here by C code that knows only the Arrow specification, in process and isolated.
async fn a_c_plugin_that_declared_string_views_reads_text_as_views(mode: Mode) {
    let dir = tempfile::tempdir().unwrap();
    build_c_plugin(dir.path(), "cfixture_views", &[("FIXTURE_STRING_VIEWS", None)]);
    let daemon = daemon_with_plugins(dir.path(), mode).await;
    let plugins = daemon.call("plugin.list", json!({})).await;
    assert_eq!(
        plugins[0]["features"],
        json!([abi::FEATURE_STRING_VIEWS]),
        "{plugins:?}"
    );
    assert_eq!(plugins[0]["abi_minor"], abi::ABI_MINOR);

    let (values, expected_total, expected_count) = text_values(1000);
    let (run, page) = c_sum(&daemon, "text", json!({"x": values})).await;
    assert_eq!(run["summary"]["total"].as_f64(), Some(expected_total), "{run}");
    assert_eq!(page["columns"]["count"], json!([expected_count]));
}

/// The layout of text follows what each C plugin declared: an ABI 1.0 plugin (and a 1.1
/// plugin without the feature) gets large UTF-8, as ABI 1.0 promised; a plugin that
/// declared `string_views` gets views, sliced tables included. Called in process, where
/// the C plugin's own message names the Arrow format it received.
#[test]
fn text_reaches_each_c_plugin_in_the_layout_it_declared() {
    let dir = tempfile::tempdir().unwrap();
    let control = Arc::new(CallControl::default());
    let params = json!({});
    let (values, total, count) = text_values(300);
    let text = table(Column::new("x".into(), values));

    for (name, defines) in [
        ("cfixture_old", vec![("FIXTURE_ABI_MINOR", Some("0"))]),
        ("cfixture_plain", vec![]),
    ] {
        let library = build_c_plugin(dir.path(), name, &defines);
        let mut host = PluginHost::default();
        host.load(&library).expect("the C plugin loads");
        let minor = host.plugin_of("cfixture.sum").unwrap().abi_minor;
        assert_eq!(minor, if name == "cfixture_old" { 0 } else { abi::ABI_MINOR });
        let failure = host
            .invoke("cfixture.sum", &params, &[("values".into(), text.clone())], &control)
            .err()
            .unwrap();
        assert!(failure.message.contains("got \"U\""), "{name}: {}", failure.message);
    }

    let library = build_c_plugin(dir.path(), "cfixture_views", &[("FIXTURE_STRING_VIEWS", None)]);
    let mut host = PluginHost::default();
    host.load(&library).expect("the C plugin loads");
    let sum = |frame: DataFrame| {
        let success = host
            .invoke("cfixture.sum", &params, &[("values".into(), frame)], &control)
            .map_err(|failure| failure.message)
            .unwrap();
        let total = success.summary["total"].as_f64().unwrap();
        let count = success.table.column("count").unwrap().i64().unwrap().get(0).unwrap();
        (total, count)
    };
    assert_eq!(sum(text.clone()), (total, count));
    // A slice starts at an offset into the views and the validity bitmap.
    let slice = text.slice(5, 100);
    let expected = slice.column("x").unwrap().str().unwrap();
    let expected_total: f64 = expected.iter().flatten().map(|text| text.len() as f64).sum();
    assert_eq!(
        sum(slice.clone()),
        (
            expected_total,
            slice.height() as i64 - slice.column("x").unwrap().null_count() as i64
        )
    );
    assert_eq!(sum(text.head(Some(0))), (0.0, 0));
}

in_both_modes!(
    a_c_plugin_that_declared_string_views_reads_text_as_views,
    the_c_plugin_loads_and_sums_a_column_with_nulls,
    unusable_libraries_are_refused_by_name_and_the_daemon_keeps_serving,
    a_panic_in_a_plugin_is_an_error_and_the_plugin_keeps_working,
    an_output_that_breaks_its_declaration_is_refused_and_nothing_is_stored,
    bad_parameters_are_refused_before_the_plugin_runs,
    a_running_analysis_is_cancelled_from_another_connection,
    a_missing_or_mistyped_required_column_is_named,
    a_pipeline_pushes_its_progress_over_websocket_step_by_step,
);
