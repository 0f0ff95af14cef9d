//! The lab plugin template (`templates/lab-plugin`) as a lab would use it: built with the
//! workspace, loaded by a real `mobilisd` only through `--plugin-dir`, run over JSON-RPC, and
//! drawn by `plot.render` from the figure its declaration states, with no change to the host.

use mobilis_tests::{plugin_library, TestDaemon};
use serde_json::{json, Value};

/// The template's library name (its `[lib] name`).
const LIBRARY: &str = "lab_sheet_carriers";

/// A directory holding the template's library alone (a link to the built one).
fn template_dir() -> tempfile::TempDir {
    let library = plugin_library(LIBRARY);
    assert!(
        library.is_file(),
        "{} was not built; is templates/lab-plugin a workspace member?",
        library.display()
    );
    let dir = tempfile::tempdir().expect("temporary directory");
    let link = dir.path().join(library.file_name().expect("a file name"));
    #[cfg(unix)]
    std::os::unix::fs::symlink(&library, &link).expect("link the template plugin");
    #[cfg(not(unix))]
    std::fs::copy(&library, &link).expect("copy the template plugin");
    dir
}

fn analysis_names(list: &Value) -> Vec<String> {
    list.as_array()
        .expect("analysis.list is an array")
        .iter()
        .filter_map(|a| a["name"].as_str().map(str::to_owned))
        .collect()
}

/// The columns a declared figure reads (not those of its fallback): x columns, layer columns,
/// flag and `kind` columns.
fn figure_columns(figure: &Value) -> Vec<String> {
    let mut columns = Vec::new();
    if figure["row_kinds"].as_array().is_some_and(|k| !k.is_empty()) {
        columns.push("kind".to_owned());
    }
    for panel in figure["panels"].as_array().into_iter().flatten() {
        columns.extend(panel["x"]["column"].as_str().map(str::to_owned));
        for layer in panel["layers"].as_array().into_iter().flatten() {
            columns.extend(layer["y"].as_str().map(str::to_owned));
            columns.extend(layer["rows"]["flag"]["column"].as_str().map(str::to_owned));
            if layer["rows"]["kind"].is_string() {
                columns.push("kind".to_owned());
            }
        }
    }
    columns
}

fn declared_outputs(described: &Value) -> Vec<String> {
    described["outputs"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|c| c["name"].as_str().map(str::to_owned))
        .collect()
}

#[tokio::test(flavor = "multi_thread")]
async fn the_template_plugin_runs_and_gets_its_declared_figure_through_the_daemon() {
    // Not loaded by default: the daemon's own scan takes only mobilis's plugins.
    let plain = TestDaemon::start().await;
    let names = analysis_names(&plain.call("analysis.list", json!({})).await);
    assert!(names.iter().any(|n| n == "hall.reduce"), "{names:?}");
    assert!(!names.iter().any(|n| n.starts_with("lab.")), "{names:?}");
    // Every built-in figure draws columns its analysis declares as outputs.
    for name in &names {
        let described = plain.call("analysis.describe", json!({"analysis": name})).await;
        let figures = described["figures"].as_array().cloned().unwrap_or_default();
        let outputs = declared_outputs(&described);
        for figure in &figures {
            // The figure or one of its fallbacks (a figure shared by two analyses draws each
            // one's table by its own variant) reads declared columns only.
            let mut variants = vec![figure];
            while let Some(fallback) = variants.last().map(|v| &v["fallback"]).filter(|f| f.is_object()) {
                variants.push(fallback);
            }
            let undeclared: Vec<Vec<String>> = variants
                .iter()
                .map(|v| figure_columns(v).into_iter().filter(|c| !outputs.contains(c)).collect())
                .collect();
            assert!(
                undeclared.iter().any(Vec::is_empty),
                "figure {} of {name} draws {undeclared:?}, which {name} does not declare",
                figure["name"]
            );
        }
    }
    drop(plain);

    let dir = template_dir();
    let daemon = TestDaemon::start_with(|options| options.plugin_dirs.push(dir.path().to_owned())).await;
    let names = analysis_names(&daemon.call("analysis.list", json!({})).await);
    assert_eq!(names, ["lab.sheet_carriers"]);
    let described = daemon
        .call("analysis.describe", json!({"analysis": "lab.sheet_carriers"}))
        .await;
    assert_eq!(described["figures"][0]["name"], "sheet_carriers", "{described}");

    // Two samples at three temperatures; R_H,s = -1 / (e n_s).
    let e = 1.602_176_634e-19;
    let r_h = |n_s: f64| -1.0 / (e * n_s);
    daemon
        .call(
            "dataset.import",
            json!({"name": "lab-hall", "columns": {
                "sample": ["A", "A", "A", "B", "B", "B"],
                "temperature_K": [10.0, 77.0, 300.0, 10.0, 77.0, 300.0],
                "sheet_resistance_ohm_sq": [200.0, 300.0, 900.0, 400.0, 500.0, 1200.0],
                "sheet_hall_coefficient_m2_per_C": [r_h(1e16), r_h(1.1e16), r_h(1.5e16), r_h(5e15), r_h(6e15), r_h(9e15)]
            }}),
        )
        .await;
    let run = daemon
        .call(
            "analysis.run",
            json!({"analysis": "lab.sheet_carriers", "inputs": {"hall": "lab-hall"}, "output": "lab-carriers", "call_id": "lab-1"}),
        )
        .await;
    assert_eq!(run["rows"], 6, "{run}");

    let kinds = daemon.call("plot.kinds", json!({"dataset": "lab-carriers"})).await;
    assert_eq!(kinds[0]["name"], "sheet_carriers", "{kinds}");
    assert_eq!(kinds[0]["analyses"], json!(["lab.sheet_carriers"]));

    // The default figure of the dataset is the declared one.
    let figure = daemon.call("plot.render", json!({"dataset": "lab-carriers"})).await;
    assert_eq!(figure["kind"], "sheet_carriers");
    assert_eq!(figure["title"], "Sheet carriers — lab-carriers");
    let panels = figure["vega_lite"]["concat"]
        .as_array()
        .expect("two panels side by side");
    assert_eq!(panels.len(), 2);
    // The quantity from the declaration, the unit (cm^-2, cm^2/(V s)) from the column name.
    for (panel, (y_title, scale)) in panels.iter().zip([("Sheet density", 1e-4), ("Hall mobility", 1e4)]) {
        let layers = panel["layer"].as_array().expect("layers");
        let mut series = std::collections::BTreeMap::<String, Vec<(f64, f64)>>::new();
        for layer in layers {
            let encoding = &layer["encoding"];
            assert_eq!(encoding["x"]["title"], "Temperature T (K)");
            assert_eq!(encoding["y"]["scale"]["type"], "log");
            let title = encoding["y"]["title"].as_str().unwrap_or_default();
            assert!(
                title.starts_with(y_title) && title.contains("(cm"),
                "y title {title} for {y_title}"
            );
            for value in layer["data"]["values"].as_array().expect("values") {
                series
                    .entry(value["series"].as_str().unwrap().to_owned())
                    .or_default()
                    .push((value["x"].as_f64().unwrap(), value["y"].as_f64().unwrap()));
            }
        }
        assert_eq!(series.keys().collect::<Vec<_>>(), ["A", "B"], "one series per sample");
        let a = &series["A"];
        assert_eq!(a.iter().map(|p| p.0).collect::<Vec<_>>(), [10.0, 77.0, 300.0]);
        // Displayed in the units of the trade: cm^-2 and cm^2/(V s).
        let expected_first = if scale < 1.0 {
            1e16 * scale
        } else {
            (r_h(1e16).abs() / 200.0) * scale
        };
        assert!(
            (a[0].1 / expected_first - 1.0).abs() < 1e-9,
            "{} vs {expected_first}",
            a[0].1
        );
    }
    let svg = figure["svg"].as_str().expect("an SVG");
    assert!(svg.starts_with("<svg"));
    assert!(svg.contains("Sheet density n"), "the panel's axis title");
    assert!(svg.contains("Temperature T (K)"));
    assert!(
        svg.contains(">A<") || svg.contains(">A\n") || svg.contains(">A</text>"),
        "legend entry A"
    );

    // The report draws it too, as it draws the built-in plugins' figures.
    let report = daemon.call("report.render", json!({"sample": "A"})).await;
    assert!(
        report["html"]
            .as_str()
            .unwrap()
            .contains("data-kind=\"sheet_carriers\""),
        "the report carries the lab figure"
    );
}
