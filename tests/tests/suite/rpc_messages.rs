//! Messages a person reads when a request or a plugin goes wrong, through a real
//! `mobilisd`: an unknown method is named with the closest known ones on every transport
//! (WebSocket, HTTP, stdio), keeping the JSON-RPC code -32601, and a plugin file the system
//! loader refuses is listed with the loader's reason, not just "dlopen failed".

use mobilis_tests::{ensure_built, TestDaemon};
use serde_json::{json, Value};
use std::io::{BufRead, BufReader, Read, Write};
use std::process::{Command, Stdio};

/// A plugin directory holding one file that only looks like a library.
fn directory_with_a_fake_library() -> tempfile::TempDir {
    let directory = tempfile::tempdir().expect("temporary directory");
    let name = format!(
        "{}not_a_plugin{}",
        std::env::consts::DLL_PREFIX,
        std::env::consts::DLL_SUFFIX
    );
    std::fs::write(directory.path().join(name), "plain text, not machine code\n").expect("write the fake library");
    directory
}

fn check_not_found(error: &Value) {
    assert_eq!(error["code"], -32601, "{error}");
    let message = error["message"].as_str().unwrap_or("");
    assert!(
        message.starts_with("no method named `dataset.lst`; did you mean dataset.list"),
        "{message}"
    );
    assert_eq!(error["data"]["closest"][0], "dataset.list", "{error}");
}

fn http_post(address: &str, body: &str) -> Value {
    let mut stream = std::net::TcpStream::connect(address).expect("connect");
    let request = format!(
        "POST / HTTP/1.1\r\nHost: {address}\r\nContent-Type: application/json\r\nContent-Length: {}\r\nConnection: close\r\n\r\n{body}",
        body.len()
    );
    stream.write_all(request.as_bytes()).unwrap();
    let mut response = String::new();
    stream.read_to_string(&mut response).unwrap();
    let (_, body) = response.split_once("\r\n\r\n").expect("a body");
    serde_json::from_str(body).unwrap_or_else(|_| panic!("JSON body: {response}"))
}

#[tokio::test(flavor = "multi_thread")]
async fn unknown_methods_and_refused_plugins_are_explained() {
    let fake = directory_with_a_fake_library();
    let daemon = TestDaemon::start_with(|options| {
        options.plugin_dirs = vec![fake.path().to_owned()];
    })
    .await;

    // WebSocket, through the Rust client.
    match daemon.client.call("dataset.lst", json!({})).await {
        Err(mobilis_client::ClientError::Rpc { code, message, data }) => {
            check_not_found(&json!({"code": code, "message": message, "data": data}))
        }
        other => panic!("expected method not found, got {other:?}"),
    }

    // HTTP, one request and inside a batch beside a known method.
    let address = daemon.daemon.url().trim_start_matches("http://").to_owned();
    let single = http_post(&address, r#"{"jsonrpc":"2.0","id":1,"method":"dataset.lst"}"#);
    check_not_found(&single["error"]);
    let batch = http_post(
        &address,
        r#"[{"jsonrpc":"2.0","id":1,"method":"dataset.lst"},{"jsonrpc":"2.0","id":2,"method":"dataset.list"}]"#,
    );
    let answers = batch.as_array().expect("a batch answer");
    let unknown = answers.iter().find(|a| a["id"] == 1).expect("answer 1");
    check_not_found(&unknown["error"]);
    let known = answers.iter().find(|a| a["id"] == 2).expect("answer 2");
    assert!(known["result"]["datasets"].is_array(), "{known}");

    // The refused plugin, with the loader's reason.
    let info = daemon.call("server.info", json!({})).await;
    let refused = info["refused_plugins"].as_array().expect("refused plugins");
    let reason = refused
        .iter()
        .find(|r| r["file"].as_str().unwrap_or("").contains("not_a_plugin"))
        .unwrap_or_else(|| panic!("the fake library is listed: {info}"))["reason"]
        .as_str()
        .unwrap()
        .to_owned();
    assert!(!reason.contains("dlopen failed"), "{reason}");
    assert!(reason.contains("(loader: "), "{reason}");
    if cfg!(target_os = "linux") {
        assert!(reason.contains("it is not a shared library"), "{reason}");
    }

    // stdio.
    let workspace = tempfile::tempdir().unwrap();
    let mut child = Command::new(ensure_built().join("mobilisd"))
        .arg("--stdio")
        .arg("--workspace")
        .arg(workspace.path())
        .arg("--plugin-dir")
        .arg(fake.path())
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .expect("mobilisd --stdio starts");
    let body = r#"{"jsonrpc":"2.0","id":7,"method":"dataset.lst","params":{}}"#;
    let mut stdin = child.stdin.take().unwrap();
    write!(stdin, "Content-Length: {}\r\n\r\n{body}", body.len()).unwrap();
    stdin.flush().unwrap();
    let mut reader = BufReader::new(child.stdout.take().unwrap());
    let mut length = 0;
    loop {
        let mut line = String::new();
        assert!(reader.read_line(&mut line).unwrap() > 0, "stdout closed early");
        let line = line.trim_end();
        if line.is_empty() {
            break;
        }
        if let Some(value) = line.strip_prefix("Content-Length:") {
            length = value.trim().parse().unwrap();
        }
    }
    let mut answer = vec![0; length];
    reader.read_exact(&mut answer).unwrap();
    drop(stdin);
    let answer: Value = serde_json::from_slice(&answer).unwrap();
    assert_eq!(answer["id"], 7, "{answer}");
    check_not_found(&answer["error"]);
    child.wait().unwrap();
}
