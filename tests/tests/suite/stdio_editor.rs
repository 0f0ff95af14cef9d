//! The stdio transport used as an editor uses it: spawn `mobilisd --stdio`, send requests
//! in `Content-Length` frames, read responses and progress notifications from stdout, and
//! cancel a running call while waiting for it — all over the one pipe pair.

use mobilis_tests::{ensure_built, fixture_plugin_dir, read_stdio_frames};
use serde_json::{json, Value};
use std::io::Write;
use std::process::{Child, ChildStdin, Command, Stdio};
use std::sync::mpsc::Receiver;
use std::time::Duration;

/// The longest a single message may take to arrive.
const PATIENCE: Duration = Duration::from_secs(60);

/// An editor's end of the pipes.
struct Editor {
    child: Child,
    stdin: Option<ChildStdin>,
    messages: Receiver<String>,
    _workspace: tempfile::TempDir,
    _plugins: tempfile::TempDir,
}

impl Editor {
    fn start() -> Editor {
        let directory = ensure_built();
        let workspace = tempfile::tempdir().expect("workspace");
        let plugins = fixture_plugin_dir();
        let mut child = Command::new(directory.join("mobilisd"))
            .arg("--stdio")
            .arg("--workspace")
            .arg(workspace.path())
            .arg("--plugin-dir")
            .arg(plugins.path())
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .expect("mobilisd starts");
        let messages = read_stdio_frames(child.stdout.take().expect("stdout is piped"));
        Editor {
            stdin: child.stdin.take(),
            child,
            messages,
            _workspace: workspace,
            _plugins: plugins,
        }
    }

    fn send_raw(&mut self, body: &[u8]) {
        let stdin = self.stdin.as_mut().expect("stdin is open");
        write!(stdin, "Content-Length: {}\r\n\r\n", body.len()).unwrap();
        stdin.write_all(body).unwrap();
        stdin.flush().unwrap();
    }

    fn send(&mut self, message: Value) {
        self.send_raw(message.to_string().as_bytes());
    }

    fn request(&mut self, id: u64, method: &str, params: Value) {
        self.send(json!({"jsonrpc": "2.0", "id": id, "method": method, "params": params}));
    }

    fn next(&self) -> Value {
        let frame = self
            .messages
            .recv_timeout(PATIENCE)
            .expect("the daemon answers within a minute");
        serde_json::from_str(&frame).unwrap_or_else(|error| panic!("a frame that is not JSON ({error}): {frame}"))
    }

    /// Messages until the response with `id`; returns (notifications before it, response).
    fn until_response(&self, id: u64) -> (Vec<Value>, Value) {
        let mut notifications = Vec::new();
        loop {
            let message = self.next();
            if message["id"] == id {
                return (notifications, message);
            }
            notifications.push(message);
        }
    }
}

/// The progress events among `messages`, in order, for subscription `subscription`.
fn events_of(messages: &[Value], subscription: &Value) -> Vec<Value> {
    messages
        .iter()
        .filter(|m| m["method"] == "progress.event" && &m["params"]["subscription"] == subscription)
        .map(|m| m["params"]["result"].clone())
        .collect()
}

#[test]
fn an_editor_runs_a_call_with_progress_then_cancels_one_over_stdio() {
    let mut editor = Editor::start();

    editor.request(1, "server.info", json!({}));
    let (_, info) = editor.until_response(1);
    assert_eq!(info["result"]["name"], "mobilisd", "{info}");

    // Subscribe first, then start the call under the same call_id.
    editor.request(2, "progress.subscribe", json!({"call_id": "editor-1"}));
    let (_, subscribed) = editor.until_response(2);
    let subscription = subscribed["result"].clone();
    assert!(subscription.is_number() || subscription.is_string(), "{subscribed}");
    editor.request(
        3,
        "analysis.run",
        json!({"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": 0.6}, "output": "waited", "call_id": "editor-1"}),
    );
    let (mut seen, run) = editor.until_response(3);
    assert_eq!(run["result"]["rows"], 1, "{run}");
    // The end event may trail the response by a moment: the two travel independently.
    while !events_of(&seen, &subscription).iter().any(|e| e["kind"] == "end") {
        seen.push(editor.next());
    }
    let events = events_of(&seen, &subscription);
    assert_eq!(events.first().expect("events")["kind"], "begin", "{events:?}");
    assert_eq!(events.last().unwrap()["kind"], "end");
    assert_eq!(events.last().unwrap()["outcome"], "done");
    let fractions: Vec<f64> = events
        .iter()
        .filter(|e| e["kind"] == "report")
        .map(|e| e["fraction"].as_f64().expect("a numeric fraction"))
        .collect();
    // 0.6 s with reports throttled to one per 100 ms: a handful of reports.
    assert!(fractions.len() >= 3, "{events:?}");
    assert!(fractions.windows(2).all(|w| w[0] <= w[1]), "{fractions:?}");
    assert!(fractions.iter().all(|f| (0.0..=1.0).contains(f)), "{fractions:?}");

    // A long call, cancelled from the same pipe while its response is outstanding.
    editor.request(4, "progress.subscribe", json!({"call_id": "editor-2"}));
    let (_, subscribed) = editor.until_response(4);
    let subscription = subscribed["result"].clone();
    editor.request(
        5,
        "analysis.run",
        json!({"analysis": "fixture.wait", "inputs": {}, "params": {"seconds": 120}, "output": "never", "call_id": "editor-2"}),
    );
    let mut seen = Vec::new();
    while !events_of(&seen, &subscription).iter().any(|e| e["kind"] == "report") {
        seen.push(editor.next());
    }
    editor.request(6, "analysis.cancel", json!({"call_id": "editor-2"}));
    let mut cancel = None;
    let mut run = None;
    while cancel.is_none() || run.is_none() || !events_of(&seen, &subscription).iter().any(|e| e["kind"] == "end") {
        let message = editor.next();
        match message["id"].as_u64() {
            Some(6) => cancel = Some(message),
            Some(5) => run = Some(message),
            _ => seen.push(message),
        }
    }
    assert_eq!(cancel.unwrap()["result"]["cancelled"], true);
    let run = run.unwrap();
    assert_eq!(run["error"]["code"], 5003, "{run}");
    let end = events_of(&seen, &subscription).pop().unwrap();
    assert_eq!(end["outcome"], "cancelled", "{end}");

    // Batches, notifications without an id, and a frame that is not JSON.
    editor.send(json!([
        {"jsonrpc": "2.0", "id": 7, "method": "dataset.list"},
        {"jsonrpc": "2.0", "method": "server.info"},
        {"jsonrpc": "2.0", "id": 8, "method": "no.such.method"}
    ]));
    let batch = editor.next();
    let answers = batch.as_array().expect("a batch is answered as a batch");
    assert_eq!(answers.len(), 2, "{batch}");
    // Only the completed call stored a dataset; the cancelled one stored nothing.
    assert_eq!(answers[0]["result"]["datasets"][0]["name"], "waited", "{batch}");
    assert_eq!(answers[0]["result"]["total"], 1, "{batch}");
    assert_eq!(answers[1]["error"]["code"], -32601);
    editor.send_raw(b"{not json");
    assert_eq!(editor.next()["error"]["code"], -32700);

    // The daemon still serves, and closing stdin ends it cleanly.
    editor.request(9, "dataset.list", json!({}));
    assert_eq!(editor.until_response(9).1["result"]["datasets"][0]["name"], "waited");
    drop(editor.stdin.take());
    let status = editor.child.wait().expect("mobilisd exits");
    assert!(status.success(), "mobilisd exited with {status}");
}
