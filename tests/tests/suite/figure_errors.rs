//! Bad requests for figures and reports get a JSON-RPC error that says what to change; the
//! daemon keeps serving and nothing stored changes.

use mobilis_tests::TestDaemon;
use serde_json::json;

#[tokio::test(flavor = "multi_thread")]
async fn bad_figure_and_report_requests_are_refused_with_what_to_change() {
    let daemon = TestDaemon::start().await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "t", "columns": {
                "sample": ["A", "A", "B"],
                "temperature_K": [77.0, 300.0, 300.0],
                "density_m3": [1e21, 3e21, 2e21]
            }}),
        )
        .await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "empty", "columns": {"temperature_K": [], "density_m3": []}}),
        )
        .await;
    let before = daemon.call("dataset.list", json!({})).await;

    let cases = [
        (json!({"dataset": "nope"}), 4002, "nope"),
        (json!({"dataset": "t", "kind": "no-such-kind"}), 4001, "hall_density"),
        (json!({"dataset": "t", "kind": "columns"}), 4001, "x"),
        (json!({"dataset": "t", "kind": "hall_mobility"}), 4001, "hall.reduce"),
        (
            json!({"dataset": "t", "filter": {"sample": "Z"}}),
            4007,
            "match the filter",
        ),
        (
            json!({"dataset": "empty", "x": "temperature_K", "y": ["density_m3"]}),
            4007,
            "`empty` has no rows",
        ),
        (
            json!({"dataset": "t", "filter": {"wafer": "A"}}),
            4004,
            "no column `wafer`",
        ),
        (
            json!({"dataset": "t", "filter": ["sample"]}),
            4001,
            "filter must be an object",
        ),
        (json!({"dataset": "t", "format": "png"}), 4001, "svg, vega-lite or both"),
        (
            json!({"dataset": "t", "x": "temperature_K", "y": ["density_m3"], "width": -3}),
            4001,
            "width",
        ),
        (json!({"dataset": "t", "colour": "red"}), 4001, "colour"),
        (json!({}), 4001, "dataset"),
    ];
    for (params, code, needle) in cases {
        let (got, message) = daemon.call_error("plot.render", params.clone()).await;
        assert_eq!(got, code, "{params}: {message}");
        assert!(
            message.contains(needle),
            "{params}: `{message}` should mention {needle}"
        );
    }
    let (code, message) = daemon.call_error("report.render", json!({"sample": "Z"})).await;
    assert_eq!(code, 4001, "{message}");
    let (code, _) = daemon.call_error("plot.kinds", json!({"dataset": "nope"})).await;
    assert_eq!(code, 4002);
    let (code, message) = daemon
        .call_error(
            "analysis.run",
            json!({"analysis": "hall.reduce", "inputs": {}, "output": "x", "call_id": ""}),
        )
        .await;
    assert_eq!(code, 4001, "{message}");

    // Still serving, nothing changed, and good requests work.
    assert_eq!(daemon.call("dataset.list", json!({})).await, before);
    let figure = daemon
        .call(
            "plot.render",
            json!({"dataset": "t", "x": "temperature_K", "y": ["density_m3"], "filter": {"sample": "A"}, "format": "svg"}),
        )
        .await;
    assert_eq!(figure["kind"], "columns");
    assert!(figure["svg"].as_str().unwrap().starts_with("<svg"));
    assert!(figure.get("vega_lite").is_none(), "format svg returns only the SVG");
    let samples = daemon.call("report.samples", json!({})).await;
    assert_eq!(
        samples,
        json!([{"sample": "A", "datasets": ["t"]}, {"sample": "B", "datasets": ["t"]}])
    );
    let page = daemon.call("report.render", json!({"sample": "B"})).await;
    assert!(page["html"].as_str().unwrap().contains("Sample B"));
}
