//! Many clients at once against the debug daemon: the capacity benchmark's mix, small. Every
//! request must be answered without error, every kept output stored and every dropped one
//! gone. Speed is the benchmark's business (`cargo bench -p mobilis-tests --bench capacity`);
//! this check counts only what failed or was lost.

use super::counts;
use mobilis_tests::load::{self, LoadPlan, Step, Transport};
use mobilis_tests::TestDaemon;
use serde_json::json;

async fn load_check(transport: Transport) {
    let clients = counts::rounds(8, 32);
    let requests = counts::rounds(100, 1000);
    let daemon = TestDaemon::start().await;
    let url = daemon.daemon.url().to_owned();
    load::prepare(&url, None).await.expect("the readings are imported");
    let plan = LoadPlan {
        url: url.clone(),
        token: None,
        transport,
        clients,
        requests_per_client: requests,
        tag: format!("load-{}", transport.name()),
    };
    let report = load::run(&plan).await;
    let (lost, left) = load::verify_outputs(&url, None, &report, &plan.tag)
        .await
        .expect("the outputs can be listed");
    counts::report(
        &format!("load {} {clients}x{requests}", transport.name()),
        report.requests,
        report.failed + left,
        lost,
    );
    assert_eq!(report.requests, clients * requests, "every client sent its requests");
    assert_eq!(
        report.failed,
        0,
        "failed requests: {:?}\n{}",
        report.failure_samples,
        report.table()
    );
    assert_eq!(lost, 0, "kept outputs missing after the run");
    assert_eq!(left, 0, "dropped outputs still listed after the run");
    // The mix reached every kind of call, and the analyses really stored something.
    for step in [
        Step::ServerInfo,
        Step::DatasetList,
        Step::DatasetInfo,
        Step::AnalysisDescribe,
        Step::RunKept,
        Step::RunDropped,
        Step::Drop,
    ] {
        assert!(report.figures(step).is_some(), "no {} was answered", step.label());
    }
    assert!(!report.kept_outputs.is_empty());
    let first = daemon
        .call("dataset.info", json!({"name": report.kept_outputs[0]}))
        .await;
    assert!(first["rows"].as_u64().unwrap_or(0) > 0, "{first}");
    // The daemon still answers after the load.
    assert!(daemon.call("server.info", json!({})).await.is_object());
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn load_over_http_keep_alive_loses_nothing() {
    load_check(Transport::HttpKeepAlive).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn load_over_websocket_loses_nothing() {
    load_check(Transport::WebSocket).await;
}
