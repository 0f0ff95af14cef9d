//! The example notebooks run: every code cell of `notebooks/rust-client.ipynb` (compiled
//! in by `build.rs`) and of `notebooks/demo-deno.ipynb` (run under Deno, the notebook's own
//! runtime, with the JS client) against a real daemon that may read the demo data.

use mobilis_tests::node::{install_npm_dependencies, run_with_timeout};
use mobilis_tests::{workspace_root, TestDaemon};

/// The Rust notebook's code cells, in order, as one block. The cells read `MOBILIS_URL` and
/// `MOBILIS_DEMO_DATA` from the environment, as in a user's kernel; `build.rs` turns those
/// reads into calls of `notebook_env`, which answers from `environment`, because setting the
/// environment of this process, which all tests share, would race with the other tests.
fn rust_notebook_cells(environment: &[(&str, String)]) -> Result<(), Box<dyn std::error::Error>> {
    let notebook_env = |name: &str| {
        environment
            .iter()
            .find(|(key, _)| *key == name)
            .map(|(_, value)| value.clone())
            .ok_or(std::env::VarError::NotPresent)
    };
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
    // What a user's kernel would have in its environment.
    let environment = [
        ("MOBILIS_URL", daemon.daemon.url().to_owned()),
        (
            "MOBILIS_DEMO_DATA",
            workspace_root().join("demo-data").display().to_string(),
        ),
    ];
    if let Err(error) = rust_notebook_cells(&environment) {
        panic!("a cell of notebooks/rust-client.ipynb failed: {error}");
    }
    let datasets = runtime.block_on(daemon.call("dataset.list", serde_json::json!({})));
    let names: Vec<&str> = datasets["datasets"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|d| d["name"].as_str())
        .collect();
    for expected in ["si-readings", "si-hall", "si-freeze-out", "si-arrhenius"] {
        assert!(names.contains(&expected), "the notebook stored {names:?}");
    }
}

/// `Deno.jupyter` exists only inside `deno jupyter`; under `deno run` the notebook's
/// `Deno.jupyter.display` calls go to this stand-in, which records what would be shown.
const JUPYTER_STAND_IN: &str = r#"
const shown = [];
const jupyterStandIn = { display: async (bundle, options) => { shown.push({ bundle, options }); } };
"#;

const DISPLAY_CHECK: &str = r#"
if (shown.length < 7) throw new Error(`the notebook showed ${shown.length} figures, 7 expected`);
for (const { bundle, options } of shown) {
  if (!options?.raw) throw new Error("figures are shown as raw MIME bundles");
  if (!String(bundle["image/svg+xml"]).startsWith("<svg")) throw new Error("a figure without SVG");
  const spec = bundle["application/vnd.vegalite.v5+json"];
  if (!String(spec?.$schema).includes("vega-lite/v5")) throw new Error("a figure without a Vega-Lite v5 spec");
}
console.log(`notebook ran; ${shown.length} figures shown`);
"#;

/// The code cells of a notebook, in order.
fn code_cells(notebook: &std::path::Path) -> Vec<String> {
    let text = std::fs::read_to_string(notebook).expect("the notebook is readable");
    let notebook: serde_json::Value = serde_json::from_str(&text).expect("the notebook is JSON");
    notebook["cells"]
        .as_array()
        .expect("a cells array")
        .iter()
        .filter(|cell| cell["cell_type"] == "code")
        .map(|cell| match &cell["source"] {
            serde_json::Value::Array(lines) => lines.iter().filter_map(|l| l.as_str()).collect(),
            other => other.as_str().unwrap_or_default().to_owned(),
        })
        .collect()
}

#[test]
fn the_javascript_notebook_runs_under_deno_against_a_real_daemon() {
    // Deno comes from the npm registry as a test-only dependency of the JS client.
    let client_dir = workspace_root().join("clients/js");
    install_npm_dependencies(&client_dir);
    let deno = client_dir.join("node_modules/.bin/deno");
    assert!(deno.is_file(), "{} is missing after npm ci", deno.display());

    let runtime = tokio::runtime::Runtime::new().unwrap();
    let daemon = daemon_with_demo_data(&runtime);
    let client_url = format!("file://{}", client_dir.join("mobilis.js").display());
    let mut module = String::from(JUPYTER_STAND_IN);
    for (index, cell) in code_cells(&workspace_root().join("notebooks/demo-deno.ipynb"))
        .iter()
        .enumerate()
    {
        // The notebook imports the client relative to its own directory, and displays
        // through the kernel.
        let cell = cell
            .replace("\"../clients/js/mobilis.js\"", &format!("{client_url:?}"))
            .replace("Deno.jupyter.", "jupyterStandIn.");
        // Cells share one scope, as in the kernel, so they are not wrapped in blocks.
        module.push_str(&format!("\n// cell {}\n", index + 1));
        module.push_str(&cell);
        module.push('\n');
    }
    module.push_str(DISPLAY_CHECK);
    let scratch = tempfile::tempdir().unwrap();
    let script = scratch.path().join("demo-deno.js");
    std::fs::write(&script, &module).unwrap();

    let mut command = std::process::Command::new(&deno);
    command
        .args(["run", "--allow-net", "--allow-env", "--allow-read", "--no-prompt"])
        .arg(&script)
        .current_dir(workspace_root().join("notebooks"))
        .env("MOBILIS_URL", daemon.daemon.url())
        .env("MOBILIS_DEMO_DATA", workspace_root().join("demo-data"))
        .env("NO_COLOR", "1");
    let (status, output) = run_with_timeout(command, std::time::Duration::from_secs(600));
    println!("{output}");
    assert!(
        status.is_some_and(|s| s.success()),
        "a cell of notebooks/demo-deno.ipynb failed under Deno ({status:?}):\n{output}"
    );
    assert!(output.contains("figures shown"), "{output}");
}

// Each notebook says at the top which kernel it needs and how to install it, and starts the
// daemon from the release build, as the README builds it.
#[test]
fn each_notebook_names_its_kernel_and_the_release_build() {
    // (notebook, kernelspec name, what its first cell must say)
    let cases: &[(&str, &str, &[&str])] = &[
        (
            "demo-deno.ipynb",
            "deno",
            &["**Kernel: Deno**", "deno jupyter --install", "jupyterlab"],
        ),
        (
            "rust-client.ipynb",
            "rust",
            &[
                "**Kernel: Rust",
                "cargo install evcxr_jupyter",
                "evcxr_jupyter --install",
                "jupyterlab",
            ],
        ),
    ];
    for (file, kernel, says) in cases {
        let path = workspace_root().join("notebooks").join(file);
        let notebook: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        assert_eq!(notebook["metadata"]["kernelspec"]["name"], *kernel, "{file}");
        let first: String = notebook["cells"][0]["source"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(|line| line.as_str())
            .collect();
        for text in says.iter().chain(&["target/release/mobilisd --data-root demo-data"]) {
            assert!(
                first.contains(text),
                "{file}'s first cell does not say `{text}`:\n{first}"
            );
        }
        let whole = std::fs::read_to_string(&path).unwrap();
        assert!(!whole.contains("target/debug"), "{file} points at the debug build");
    }
}
