//! `mobilis report` end to end: the demo pipeline through the CLI and a real daemon, one HTML
//! page per sample, each opened in headless Chromium to check that the browser lays out
//! every figure; one page is also saved as a screenshot for people to look at. Also how the
//! command line and the daemon behave in a shell: output piped into a reader that goes away
//! ends quietly, a log redirected to a file carries no colour codes, and a browser opening
//! the daemon's address is told what answers there, and `show` names the columns there are
//! when asked for one that is not.
//!
//! Chromium comes from Debian's `chromium` package (`tests/run` installs it); `$CHROMIUM`
//! names another binary.

use mobilis_tests::browser::headless_chromium;
use mobilis_tests::{ensure_built, workspace_root, TestDaemon};
use std::path::Path;
use std::process::{Command, Output};

/// Runs headless Chromium on a local page with `mode` (`--dump-dom` or `--screenshot=...`).
fn headless(page: &Path, mode: &str, profile: &Path) -> Output {
    headless_chromium(profile)
        .args([
            "--hide-scrollbars",
            "--window-size=1280,2600",
            "--virtual-time-budget=5000",
        ])
        .arg(mode)
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("Chromium starts")
}

/// The value of an attribute of the `<html>` element in a dumped DOM.
fn html_attribute(dom: &str, name: &str) -> Option<usize> {
    let start = dom.find("<html")?;
    let tag = &dom[start..start + dom[start..].find('>')?];
    let value_start = tag.find(&format!("{name}=\""))? + name.len() + 2;
    tag[value_start..].split('"').next()?.parse().ok()
}

/// Runs the CLI; returns what it printed on stdout and on stderr.
fn mobilis(url: &str, progress: &str, arguments: &[&str]) -> (String, String) {
    let output = Command::new(ensure_built().join("mobilis"))
        .args(["--url", url, "--progress", progress])
        .args(arguments)
        .output()
        .expect("mobilis runs");
    assert!(
        output.status.success(),
        "mobilis {arguments:?} failed:\n{}\n{}",
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
    (
        String::from_utf8_lossy(&output.stdout).into_owned(),
        String::from_utf8_lossy(&output.stderr).into_owned(),
    )
}

#[tokio::test(flavor = "multi_thread")]
async fn each_sample_gets_a_page_that_renders_with_its_figures() {
    let demo_data = workspace_root().join("demo-data");
    let roots = demo_data.clone();
    let daemon = TestDaemon::start_with(move |options| options.data_roots.push(roots)).await;
    let url = daemon.daemon.url().to_owned();
    let pipeline = demo_data.join("pipeline.toml");
    // The pipeline runs with the progress bar forced on: it is drawn on stderr, step by step.
    let (_, bar) = mobilis(&url, "always", &["pipeline", pipeline.to_str().unwrap()]);
    assert!(bar.contains("] 100% ") || bar.contains("step 12 of 12"), "{bar}");
    assert!(
        bar.contains("step 1 of 12 (hall.reduce)"),
        "no progress bar on stderr:\n{bar}"
    );

    // The pages and a screenshot stay under the build directory for people to look at.
    let out = workspace_root().join("target").join("report-check");
    let _ = std::fs::remove_dir_all(&out);
    let (written, _) = mobilis(&url, "never", &["report", "--out", out.to_str().unwrap()]);
    let samples = daemon.call("report.samples", serde_json::json!({})).await;
    let samples: Vec<String> = samples
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["sample"].as_str().unwrap().to_owned())
        .collect();
    // The demo's five samples: two silicon pieces, the heterostructure, the InAs film, the GaN film.
    assert!(samples.len() >= 5, "{samples:?}");
    let profile = tempfile::tempdir().unwrap();
    for sample in &samples {
        let page = out.join(format!("{sample}.html"));
        assert!(page.is_file(), "no page for {sample}; mobilis wrote:\n{written}");
        let html = std::fs::read_to_string(&page).unwrap();
        // Self-contained: nothing is fetched from anywhere.
        for external in [
            "src=\"http",
            "href=\"http",
            "<link ",
            "@import",
            "url(http",
            "url(\"http",
            "url('http",
        ] {
            assert!(
                !html.contains(external),
                "{sample}: the page refers outside itself ({external})"
            );
        }
        assert!(
            html.contains("support, and do not replace"),
            "{sample}: the caution is missing"
        );
        let figures_in_file = html.matches("<figure class=\"plot\"").count();
        assert!(figures_in_file >= 1, "{sample}: no figure in the page");

        let dump = headless(&page, "--dump-dom", profile.path());
        let dom = String::from_utf8_lossy(&dump.stdout);
        assert!(
            dump.status.success(),
            "Chromium failed on {sample}: {}",
            String::from_utf8_lossy(&dump.stderr)
        );
        let figures =
            html_attribute(&dom, "data-figures").unwrap_or_else(|| panic!("{sample}: the page's script did not run"));
        let drawn = html_attribute(&dom, "data-figures-drawn").unwrap();
        assert_eq!(figures, figures_in_file, "{sample}");
        assert_eq!(
            drawn, figures,
            "{sample}: Chromium laid out {drawn} of {figures} figures"
        );
    }

    // The silicon report carries the reduction's quality flags and the provenance chain.
    let silicon = std::fs::read_to_string(out.join("SiRef-centre.html")).unwrap();
    for expected in [
        "Quality flags",
        "hall.reduce",
        "carriers.freeze_out_fit",
        "si-wafer/readings.csv",
        "plugin hall",
    ] {
        assert!(silicon.contains(expected), "SiRef-centre.html lacks {expected}");
    }

    let shot = out.join("SiRef-centre.png");
    let output = headless(
        &out.join("SiRef-centre.html"),
        &format!("--screenshot={}", shot.display()),
        profile.path(),
    );
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    let size = std::fs::metadata(&shot).map(|m| m.len()).unwrap_or(0);
    assert!(size > 50_000, "the screenshot is suspiciously small ({size} bytes)");
}

// A command line piped into `head` ends quietly when the reader goes away, as other tools do:
// the reader's end is closed before the CLI prints, so every write meets a broken pipe.
#[tokio::test(flavor = "multi_thread")]
async fn output_into_a_closed_pipe_ends_quietly() {
    let daemon = TestDaemon::start().await;
    let mut child = Command::new(ensure_built().join("mobilis"))
        .args(["--url", daemon.daemon.url(), "analyses"])
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("mobilis starts");
    drop(child.stdout.take());
    let output = child.wait_with_output().expect("mobilis ends");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        !stderr.contains("panicked") && !stderr.contains("Broken pipe"),
        "mobilis complained about the closed pipe:\n{stderr}"
    );
}

// The daemon's log, redirected to a file, holds plain text: no terminal colour codes.
#[test]
fn a_redirected_daemon_log_has_no_colour_codes() {
    let workspace = tempfile::tempdir().unwrap();
    let log = workspace.path().join("daemon.log");
    let mut daemon = Command::new(ensure_built().join("mobilisd"))
        .args(["--listen", "127.0.0.1:0", "--workspace"])
        .arg(workspace.path().join("ws"))
        .stdout(std::process::Stdio::piped())
        .stderr(std::fs::File::create(&log).unwrap())
        .spawn()
        .expect("mobilisd starts");
    let mut ready = String::new();
    std::io::BufRead::read_line(&mut std::io::BufReader::new(daemon.stdout.take().unwrap()), &mut ready).unwrap();
    assert!(ready.starts_with("listening on http://"), "{ready}");
    daemon.kill().unwrap();
    daemon.wait().unwrap();
    let text = std::fs::read_to_string(&log).unwrap();
    assert!(!text.is_empty(), "the daemon logged nothing to check");
    assert!(!text.contains('\u{1b}'), "colour codes in a redirected log:\n{text}");
}

// A person who opens the daemon's address in a browser (a plain GET of `/`) learns what
// answers there and where the documentation is, instead of a bare 405.
#[tokio::test(flavor = "multi_thread")]
async fn a_plain_visit_says_what_answers_here() {
    use std::io::{Read, Write};
    let daemon = TestDaemon::start().await;
    let address = daemon.daemon.url().trim_start_matches("http://").to_owned();
    let mut stream = std::net::TcpStream::connect(&address).unwrap();
    write!(stream, "GET / HTTP/1.1\r\nHost: {address}\r\nConnection: close\r\n\r\n").unwrap();
    let mut answer = String::new();
    stream.read_to_string(&mut answer).unwrap();
    assert!(answer.starts_with("HTTP/1.1 200"), "{answer}");
    assert!(
        answer.contains("\"name\":\"mobilisd\"") && answer.contains("rpc.discover"),
        "{answer}"
    );
    // JSON-RPC still answers on the same address.
    let info = daemon.call("server.info", serde_json::json!({})).await;
    assert_eq!(info["name"], serde_json::json!("mobilisd"));
}

// `mobilis show --column` with a column the dataset lacks is an error that lists the columns
// there are, not a silently shorter table.
#[tokio::test(flavor = "multi_thread")]
async fn show_refuses_an_unknown_column_and_lists_the_real_ones() {
    let daemon = TestDaemon::start().await;
    daemon
        .call(
            "dataset.import",
            serde_json::json!({"name": "few", "columns": {"sample": ["a", "b"], "density_m3": [1e21, 2e21]}}),
        )
        .await;
    let output = Command::new(ensure_built().join("mobilis"))
        .args(["--url", daemon.daemon.url(), "show", "few", "--column", "density_cm3"])
        .output()
        .expect("mobilis runs");
    assert!(!output.status.success());
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        stderr.contains("no column density_cm3") && stderr.contains("sample, density_m3"),
        "{stderr}"
    );
    let (shown, _) = mobilis(daemon.daemon.url(), "never", &["show", "few", "--column", "density_m3"]);
    assert!(shown.contains("rows 0..2 of 2"), "{shown}");
}
