//! The example notebooks run: every code cell of `notebooks/rust-client.ipynb` (compiled
//! in by `build.rs`) and of `notebooks/demo-deno.ipynb` (run under Node with the JS client)
//! against a real daemon that may read the demo data.

use mobilis_tests::{workspace_root, TestDaemon};

/// The Rust notebook's code cells, in order, as one block.
fn rust_notebook_cells() -> Result<(), Box<dyn std::error::Error>> {
    include!(concat!(env!("OUT_DIR"), "/rust_client_notebook.rs"))
}

/// A daemon whose data roots include the demo data, started on its own runtime so that the
/// notebook code can make its own, as it does in a kernel.
fn daemon_with_demo_data(runtime: &tokio::runtime::Runtime) -> TestDaemon {
    let demo_data = workspace_root().join("demo-data");
    runtime.block_on(TestDaemon::start_with(move |options| {
        options.data_roots.push(demo_data)
    }))
}

#[test]
fn the_rust_notebook_runs_against_a_real_daemon() {
    let runtime = tokio::runtime::Runtime::new().unwrap();
    let daemon = daemon_with_demo_data(&runtime);
    // The notebook reads these, as a user's kernel would; this test binary's other test does
    // not read them, so setting them here races with nothing.
    std::env::set_var("MOBILIS_URL", daemon.daemon.url());
    std::env::set_var("MOBILIS_DEMO_DATA", workspace_root().join("demo-data"));
    if let Err(error) = rust_notebook_cells() {
        panic!("a cell of notebooks/rust-client.ipynb failed: {error}");
    }
    let datasets = runtime.block_on(daemon.call("dataset.list", serde_json::json!({})));
    let names: Vec<&str> = datasets
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|d| d["name"].as_str())
        .collect();
    for expected in ["si-readings", "si-hall", "si-freeze-out", "si-arrhenius"] {
        assert!(names.contains(&expected), "the notebook stored {names:?}");
    }
}
