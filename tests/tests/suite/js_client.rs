//! The JavaScript client's tests (`clients/js/test/*.test.mjs`, Node's test runner) against a
//! real daemon: this test starts `mobilisd` with the workspace's plugins and the fixture
//! plugin (for `fixture.wait`), installs the client's test dependencies with `npm ci` when
//! `clients/js/node_modules` is missing, and runs `node --test` with `MOBILIS_URL` set.
//! Node.js 20 or later must be installed; without it the test fails and says so.

use mobilis_tests::node::{install_npm_dependencies, node_command, run_with_timeout};
use mobilis_tests::{ensure_built, plugin_library, workspace_root, TestDaemon};
use std::path::{Path, PathBuf};
use std::time::Duration;

/// How long the Node tests may take in all (they take seconds; a debug daemon on a busy
/// 2-core machine is slower).
const NODE_TIMEOUT: Duration = Duration::from_secs(600);

/// A temporary directory with links to the workspace's plugins and the fixture plugin.
fn plugin_dir() -> tempfile::TempDir {
    let fixture = plugin_library("test_fixture_plugin");
    let prefix = format!("{}mobilis_", std::env::consts::DLL_PREFIX);
    let mut libraries: Vec<PathBuf> = std::fs::read_dir(ensure_built())
        .expect("the build directory is readable")
        .flatten()
        .map(|entry| entry.path())
        .filter(|path| {
            let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
            name.starts_with(&prefix) && name.ends_with(std::env::consts::DLL_SUFFIX)
        })
        .collect();
    libraries.push(fixture);
    let dir = tempfile::tempdir().expect("temporary directory");
    for library in libraries {
        let link = dir.path().join(library.file_name().expect("a file name"));
        #[cfg(unix)]
        std::os::unix::fs::symlink(&library, &link).expect("link a plugin");
        #[cfg(not(unix))]
        std::fs::copy(&library, &link).expect("copy a plugin");
    }
    dir
}

/// The Node test files, relative to `clients/js`.
fn test_files(client_dir: &Path) -> Vec<String> {
    let mut files: Vec<String> = std::fs::read_dir(client_dir.join("test"))
        .expect("clients/js/test exists")
        .flatten()
        .filter_map(|entry| entry.file_name().into_string().ok())
        .filter(|name| name.ends_with(".test.mjs"))
        .map(|name| format!("test/{name}"))
        .collect();
    files.sort();
    assert!(!files.is_empty(), "no *.test.mjs files in clients/js/test");
    files
}

#[tokio::test(flavor = "multi_thread")]
async fn the_javascript_client_passes_its_node_tests() {
    let client_dir = workspace_root().join("clients/js");
    install_npm_dependencies(&client_dir);
    let plugins = plugin_dir();
    let plugin_path = plugins.path().to_owned();
    // The figure tests draw analysis outputs of the demo data.
    let demo_data = workspace_root().join("demo-data");
    let demo_root = demo_data.clone();
    let daemon = TestDaemon::start_with(move |options| {
        options.plugin_dirs.push(plugin_path);
        options.data_roots.push(demo_root);
    })
    .await;

    let mut node = node_command();
    node.args(["--test", "--test-reporter=spec"])
        .args(test_files(&client_dir))
        .current_dir(&client_dir)
        .env("MOBILIS_URL", daemon.daemon.url())
        .env("MOBILIS_DATA", &daemon.data)
        .env("MOBILIS_DEMO_DATA", &demo_data);
    let (status, output) = tokio::task::spawn_blocking(move || run_with_timeout(node, NODE_TIMEOUT))
        .await
        .expect("the waiting task does not panic");
    println!("{output}");
    match status {
        Some(status) => assert!(status.success(), "node --test failed ({status}):\n{output}"),
        None => panic!("node --test ran longer than {NODE_TIMEOUT:?} and was stopped:\n{output}"),
    }
    drop(daemon);
}

/// Each literal call in the client's source: the method name and the member names of the
/// object literal sent with it (spread members, `...params`, cannot be read and are
/// skipped), or `None` for params sent by position or not at all.
fn literal_calls(source: &str) -> Vec<(String, Option<Vec<String>>)> {
    let mut calls = Vec::new();
    for opener in ["call(", "request(", "subscribe(", "tracked("] {
        let mut rest = source;
        while let Some(at) = rest.find(opener) {
            let preceded_by_name_part = rest[..at]
                .chars()
                .last()
                .is_some_and(|c| c.is_alphanumeric() || c == '_');
            rest = &rest[at + opener.len()..];
            if preceded_by_name_part {
                continue;
            }
            let arguments = rest.trim_start();
            let Some(quoted) = arguments.strip_prefix('"') else {
                continue;
            };
            let Some(end) = quoted.find('"') else { continue };
            let method = &quoted[..end];
            if !method.contains('.') || method.contains(' ') {
                continue;
            }
            let after = quoted[end + 1..].trim_start();
            let members = after
                .strip_prefix(',')
                .map(str::trim_start)
                .and_then(|object| object.strip_prefix('{'))
                .map(|object| {
                    let mut depth = 0usize;
                    let mut body = String::new();
                    for c in object.chars() {
                        match c {
                            '{' | '[' | '(' => depth += 1,
                            '}' | ']' | ')' if depth == 0 => break,
                            '}' | ']' | ')' => depth -= 1,
                            ',' if depth == 0 => body.push('\u{1}'),
                            _ => {}
                        }
                        if c != ',' || depth > 0 {
                            body.push(c);
                        }
                    }
                    body.split('\u{1}')
                        .map(str::trim)
                        .filter(|member| !member.is_empty() && !member.starts_with("..."))
                        .map(|member| {
                            let key = member.split(':').next().unwrap_or(member).trim();
                            key.trim_matches(|c| c == '"' || c == '\'').to_owned()
                        })
                        .collect()
                });
            calls.push((method.to_owned(), members));
        }
    }
    calls
}

/// The JavaScript client cannot share the protocol's Rust types, so its calls are checked
/// against the daemon's own description: every method it names is in `rpc.discover`, and
/// every parameter it sends by name is one that method documents.
#[tokio::test(flavor = "multi_thread")]
async fn every_call_of_the_javascript_client_is_documented() {
    let source = std::fs::read_to_string(workspace_root().join("clients/js/mobilis.js")).expect("the client's source");
    let calls = literal_calls(&source);
    assert!(calls.len() >= 12, "found only {calls:?}");
    assert!(calls
        .iter()
        .any(|(method, members)| method == "analysis.describe"
            && members.as_deref() == Some(&["analysis".to_owned()][..])));
    let daemon = TestDaemon::start().await;
    let discover = daemon.call("rpc.discover", serde_json::json!({})).await;
    let methods = discover["methods"].as_array().expect("methods");
    let mut problems = Vec::new();
    for (method, members) in &calls {
        let Some(documented) = methods.iter().find(|m| m["name"] == method.as_str()) else {
            problems.push(format!("{method} is not in rpc.discover"));
            continue;
        };
        let names: Vec<&str> = documented["params"]
            .as_array()
            .into_iter()
            .flatten()
            .filter_map(|p| p["name"].as_str())
            .collect();
        for member in members.iter().flatten() {
            if !names.contains(&member.as_str()) {
                problems.push(format!(
                    "{method} is sent `{member}`, which it does not take ({})",
                    names.join(", ")
                ));
            }
        }
    }
    assert!(problems.is_empty(), "{}", problems.join("\n"));
    drop(daemon);
}
