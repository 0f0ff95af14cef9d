//! The JS client, unchanged, in a browser: headless Chromium loads a page from a small
//! static server of this test; the page imports `clients/js/mobilis.js` and talks to real
//! daemons — over WebSocket, and over HTTP with a bearer token through CORS — then posts
//! what it saw back to the static server.
//!
//! Chromium comes from Debian's `chromium` package (`tests/run` installs it); `$CHROMIUM`
//! names another binary.

use mobilis_tests::browser::headless_chromium;
use mobilis_tests::{fixture_plugin_dir, workspace_root, TestDaemon};
use serde_json::Value;
use std::io::{BufRead, BufReader, Read, Write};
use std::net::{TcpListener, TcpStream};
use std::sync::mpsc::{channel, Sender};
use std::time::Duration;

const TOKEN: &str = "browser-t0ken";

/// The page: every check runs in the browser; the result travels back as JSON.
const PAGE: &str = r#"<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>mobilis in a browser</title></head><body>
<script type="module">
import { connect } from "./mobilis.js";
const report = (result) => fetch("/result", { method: "POST", body: JSON.stringify(result) });
const wait = (seconds, output) => ({ analysis: "fixture.wait", inputs: {}, params: { seconds }, output });
try {
  const out = {};
  const ws = await connect("WS_DAEMON");
  out.wsInfo = (await ws.info()).name;
  const events = [];
  const run = await ws.run(wait(0.5, "browser-ws"), { onProgress: (e) => events.push(e) });
  out.wsRows = run.rows;
  out.wsKinds = events.map((e) => e.kind);
  out.wsFractions = events.filter((e) => e.kind === "report").map((e) => e.fraction);
  const controller = new AbortController();
  try {
    await ws.run(wait(60, "browser-never"), {
      signal: controller.signal,
      onProgress: (e) => { if (e.kind === "report") controller.abort(); },
    });
    out.cancelCode = null;
  } catch (error) {
    out.cancelCode = error.code;
  }
  ws.close();
  const http = await connect("HTTP_DAEMON", { transport: "http", token: "TOKEN" });
  out.httpInfo = (await http.info()).name;
  const httpEvents = [];
  const httpRun = await http.run(wait(0.6, "browser-http"), { onProgress: (e) => httpEvents.push(e) });
  out.httpRows = httpRun.rows;
  out.httpKinds = [...new Set(httpEvents.map((e) => e.kind))];
  const stranger = await connect("HTTP_DAEMON", { transport: "http", token: "wrong" });
  try { await stranger.info(); out.wrongToken = "accepted"; } catch (error) { out.wrongToken = error.kind; }
  await report({ ok: true, ...out });
} catch (error) {
  await report({ ok: false, error: String((error && error.stack) || error) });
}
</script></body></html>
"#;

/// Serves the page and the client module; hands the posted result to `results`.
fn serve(listener: TcpListener, page: String, results: Sender<String>) {
    let module = std::fs::read(workspace_root().join("clients/js/mobilis.js")).expect("clients/js/mobilis.js");
    for stream in listener.incoming().flatten() {
        let _ = answer(stream, &page, &module, &results);
    }
}

fn answer(mut stream: TcpStream, page: &str, module: &[u8], results: &Sender<String>) -> std::io::Result<()> {
    let mut reader = BufReader::new(stream.try_clone()?);
    let mut request_line = String::new();
    reader.read_line(&mut request_line)?;
    let mut length = 0;
    loop {
        let mut line = String::new();
        if reader.read_line(&mut line)? == 0 || line.trim().is_empty() {
            break;
        }
        if let Some((name, value)) = line.split_once(':') {
            if name.eq_ignore_ascii_case("content-length") {
                length = value.trim().parse().unwrap_or(0);
            }
        }
    }
    let path = request_line.split_whitespace().nth(1).unwrap_or("/");
    let (status, content_type, body): (&str, &str, Vec<u8>) = match path {
        "/" => ("200 OK", "text/html; charset=utf-8", page.as_bytes().to_vec()),
        "/mobilis.js" => ("200 OK", "text/javascript; charset=utf-8", module.to_vec()),
        "/result" => {
            let mut posted = vec![0; length];
            reader.read_exact(&mut posted)?;
            let _ = results.send(String::from_utf8_lossy(&posted).into_owned());
            ("204 No Content", "text/plain", Vec::new())
        }
        _ => ("404 Not Found", "text/plain", b"not here".to_vec()),
    };
    write!(
        stream,
        "HTTP/1.1 {status}\r\nContent-Type: {content_type}\r\nContent-Length: {}\r\nConnection: close\r\n\r\n",
        body.len()
    )?;
    stream.write_all(&body)
}

#[tokio::test(flavor = "multi_thread")]
async fn the_js_client_runs_unchanged_in_a_browser() {
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let page_origin = format!("http://{}", listener.local_addr().unwrap());
    let plugins = fixture_plugin_dir();
    let daemon = |token: Option<&str>| {
        let plugin_dir = plugins.path().to_owned();
        let mut arguments = vec!["--allow-origin".to_owned(), page_origin.clone()];
        if let Some(token) = token {
            arguments.extend(["--token".to_owned(), token.to_owned()]);
        }
        TestDaemon::start_with(move |options| {
            options.plugin_dirs.push(plugin_dir);
            options.extra_arguments = arguments;
        })
    };
    let open = daemon(None).await;
    let guarded = daemon(Some(TOKEN)).await;
    let page = PAGE
        .replace("WS_DAEMON", open.daemon.url())
        .replace("HTTP_DAEMON", guarded.daemon.url())
        .replace("TOKEN", TOKEN);
    let (results, received) = channel();
    std::thread::spawn(move || serve(listener, page, results));

    let profile = tempfile::tempdir().unwrap();
    let mut browser = headless_chromium(profile.path())
        .arg(format!("{page_origin}/"))
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .expect("Chromium starts");
    let outcome = tokio::task::spawn_blocking(move || received.recv_timeout(Duration::from_secs(120)))
        .await
        .unwrap();
    let _ = browser.kill();
    let _ = browser.wait();
    let posted = outcome.expect("the page reported within two minutes");
    let result: Value = serde_json::from_str(&posted).expect("the page posts JSON");
    assert_eq!(result["ok"], true, "the page failed: {}", result["error"]);

    // WebSocket: progress pushed in order, then a cancelled call.
    assert_eq!(result["wsInfo"], "mobilisd");
    assert_eq!(result["wsRows"], 1);
    let kinds: Vec<&str> = result["wsKinds"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(Value::as_str)
        .collect();
    assert_eq!(kinds.first(), Some(&"begin"), "{kinds:?}");
    assert_eq!(kinds.last(), Some(&"end"), "{kinds:?}");
    let fractions: Vec<f64> = result["wsFractions"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(Value::as_f64)
        .collect();
    assert!(fractions.len() >= 2, "{fractions:?}");
    assert!(fractions.windows(2).all(|w| w[0] <= w[1]), "{fractions:?}");
    assert_eq!(result["cancelCode"], 5003, "{result}");
    // HTTP with a token, through CORS: progress by polling; a wrong token is refused.
    assert_eq!(result["httpInfo"], "mobilisd");
    assert_eq!(result["httpRows"], 1);
    assert_eq!(
        result["httpKinds"],
        serde_json::json!(["begin", "report", "end"]),
        "{result}"
    );
    assert_eq!(result["wrongToken"], "transport", "{result}");
    drop((open, guarded));
}
