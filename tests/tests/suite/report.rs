//! `mobilis report` end to end: the demo pipeline through the CLI and a real daemon, one HTML
//! page per sample, each opened in headless Chromium to check that the browser lays out
//! every figure; one page is also saved as a screenshot for people to look at. Also how the
//! command line and the daemon behave in a shell: output piped into a reader that goes away
//! ends quietly, a log redirected to a file carries no colour codes, and a browser opening
//! the daemon's address is told what answers there, and `show` names the columns there are
//! when asked for one that is not.
//!
//! The demo's pages are printed to PDF and read back: every number the demo prints for a
//! sample must be on that sample's paper, and no table may be wider than A4 or Letter.
//!
//! Chromium comes from Debian's `chromium` package (`tests/run` installs it); `$CHROMIUM`
//! names another binary. `pdftotext` comes from Debian's `poppler-utils` (`tests/run` installs it too).

use mobilis_tests::browser::{headless_chromium, pdf_text, print_to_pdf};
use mobilis_tests::{ensure_built, run_cli, workspace_root, TestDaemon};
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
    let run = run_cli(url, progress, arguments);
    assert!(
        run.success,
        "mobilis {arguments:?} failed:\n{}\n{}",
        run.stdout, run.stderr
    );
    (run.stdout, run.stderr)
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
    let (written, _) = mobilis(&url, "never", &["report", "--pdf", "--out", out.to_str().unwrap()]);
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
        let pdf = std::fs::metadata(out.join(format!("{sample}.pdf"))).map_or(0, |m| m.len());
        assert!(
            pdf > 10_000,
            "{sample}.pdf is missing or empty ({pdf} bytes); mobilis wrote:\n{written}"
        );
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
        // Figures of two panels are in the file twice: as drawn on screen and for paper.
        let figures_in_file = html.matches("<figure class=\"plot").count() - html.matches("print-only\"").count();
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

/// A number as printed: its value and half the step of its last digit (the interval its
/// digits stand for).
#[derive(Debug, Clone, Copy)]
struct Printed {
    value: f64,
    half_step: f64,
}

/// The step of the last printed digit: `2.797e15` -> 1e12, `48080` -> 1, `0.0030` -> 1e-4.
fn parse_printed(token: &str) -> Option<Printed> {
    let value: f64 = token.parse().ok()?;
    if !value.is_finite() || !token.starts_with(|c: char| c.is_ascii_digit() || c == '-') {
        return None;
    }
    let (mantissa, exponent) = match token.split_once(['e', 'E']) {
        Some((m, e)) => (m, e.parse::<i32>().ok()?),
        None => (token, 0),
    };
    let decimals = mantissa.split_once('.').map_or(0, |(_, d)| d.len() as i32);
    Some(Printed {
        value,
        half_step: 0.5 * 10f64.powi(exponent - decimals),
    })
}

/// Superscript digits back to a number: `¹⁵` -> 15, `⁻³¹` -> -31.
fn superscript_number(text: &str) -> Option<i32> {
    mobilis_physics::quote::parse_superscript(text)
}

/// Every number in a text: plain ones (`2.797e15`, `45.00`), `a ± b` (the value good to the
/// uncertainty's second digit when that is coarser than its own) and `(a ± b) × 10ⁿ`.
/// Text in square brackets (the demo's invented truth) is left out.
fn numbers_in(text: &str) -> Vec<Printed> {
    let mut kept = String::with_capacity(text.len());
    let mut depth = 0;
    for c in text.chars() {
        match c {
            '[' => depth += 1,
            ']' => depth -= 1,
            '(' | ')' if depth == 0 => {
                kept.push(' ');
                kept.push(c);
                kept.push(' ');
            }
            ',' | ';' | ':' if depth == 0 => kept.push(' '),
            c if depth == 0 => kept.push(c),
            _ => {}
        }
    }
    let tokens: Vec<&str> = kept.split_whitespace().collect();
    let mut numbers: Vec<Option<Printed>> = tokens.iter().map(|t| parse_printed(t)).collect();
    for i in 1..tokens.len().saturating_sub(1) {
        if tokens[i] == "±" {
            if let (Some(value), Some(uncertainty)) = (numbers[i - 1], numbers[i + 1]) {
                let second_digit = 10f64.powi(uncertainty.value.abs().log10().floor() as i32 - 1);
                // `48080 ± 240`: both good to the tens.
                numbers[i - 1] = Some(Printed {
                    half_step: value.half_step.max(0.5 * second_digit),
                    ..value
                });
                numbers[i + 1] = Some(Printed {
                    half_step: uncertainty.half_step.max(0.5 * second_digit),
                    ..uncertainty
                });
            }
        }
    }
    for i in 1..tokens.len().saturating_sub(1) {
        let Some(exponent) = (tokens[i] == "×")
            .then(|| tokens[i + 1].strip_prefix("10"))
            .flatten()
            .and_then(superscript_number)
        else {
            continue;
        };
        let scale = 10f64.powi(exponent);
        let first = if tokens[i - 1] == ")" {
            (0..i - 1).rev().find(|&j| tokens[j] == "(").unwrap_or(i - 1)
        } else {
            i - 1
        };
        for number in numbers[first..i].iter_mut().flatten() {
            number.value *= scale;
            number.half_step *= scale;
        }
    }
    numbers.into_iter().flatten().collect()
}

/// Whether `wanted` is among `printed`: equal within the digits either of them shows.
fn is_printed(wanted: Printed, printed: &[Printed]) -> bool {
    printed
        .iter()
        .any(|p| (p.value - wanted.value).abs() <= (p.half_step + wanted.half_step) * (1.0 + 1e-9))
}

/// The numbers the demo printed for each sample: a line `Sample NAME ...` opens a section
/// of that sample, a line starting with a sample's name is that sample's, any other line at
/// the margin closes the section. The invented truth and the analyses' notes are left out.
fn demo_numbers(terminal: &str, samples: &[String]) -> Vec<(String, Vec<(String, Printed)>)> {
    let mut found: Vec<(String, Vec<(String, Printed)>)> = samples.iter().map(|s| (s.clone(), Vec::new())).collect();
    let mut current: Option<usize> = None;
    for line in terminal.lines() {
        if line.starts_with("Reports, one self-contained page") {
            break;
        }
        let first = line.split_whitespace().next().unwrap_or("");
        let mut owner = current;
        if first == "Sample" {
            let name = line.split_whitespace().nth(1).unwrap_or("").trim_end_matches(':');
            current = samples.iter().position(|s| s == name);
            owner = current;
        } else if let Some(index) = samples.iter().position(|s| s == first) {
            owner = Some(index);
        } else if !line.starts_with(' ') {
            current = None;
            owner = None;
        }
        let Some(index) = owner else { continue };
        if line.contains("invented truth") || line.trim_start().starts_with("note:") {
            continue;
        }
        for number in numbers_in(line) {
            found[index].1.push((line.trim().to_owned(), number));
        }
    }
    found
}

/// The text of an attribute of the `<html>` element in a dumped DOM.
fn html_attribute_text(dom: &str, name: &str) -> Option<String> {
    let start = dom.find("<html")?;
    let tag = &dom[start..start + dom[start..].find('>')?];
    let value_start = tag.find(&format!("{name}=\""))? + name.len() + 2;
    tag[value_start..].split('"').next().map(str::to_owned)
}

#[test]
fn printed_numbers_are_read_to_the_digits_they_show() {
    let printed = numbers_in("n = (2.797 ± 0.031) × 10¹⁵ cm⁻³ 48080 ± 240 cm²/(V s) [9.9] 0.0030 T");
    let values: Vec<f64> = printed.iter().map(|p| p.value).collect();
    assert_eq!(values.len(), 5, "{printed:?}");
    let demo = |text: &str| parse_printed(text).unwrap();
    for shown in ["2.797e15", "3.140e13", "48083", "244.9", "0.002958"] {
        assert!(is_printed(demo(shown), &printed), "{shown} not found in {printed:?}");
    }
    // Other numbers are not: the check can fail.
    for absent in ["2.790e15", "3.300e13", "48200", "9.9", "0.0040"] {
        assert!(!is_printed(demo(absent), &printed), "{absent} found in {printed:?}");
    }
}

// The demo's own pages, printed: each starts with its results, holds every number the demo
// prints in the terminal for its sample, and no table is wider than A4 or Letter paper.
// Figure text is drawn at 10 px or more on a 1280 px screen and on both papers.
#[test]
fn demo_pages_print_every_key_number_without_clipping() {
    let work = tempfile::tempdir().unwrap();
    let pages = work.path().join("pages");
    let output = Command::new(ensure_built().join("mobilis"))
        .args(["--progress", "never", "demo", "--workspace"])
        .arg(work.path().join("workspace"))
        .arg("--reports")
        .arg(&pages)
        .output()
        .expect("mobilis demo runs");
    let terminal = String::from_utf8_lossy(&output.stdout).into_owned();
    assert!(
        output.status.success(),
        "mobilis demo failed:\n{terminal}\n{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let mut samples: Vec<String> = std::fs::read_dir(&pages)
        .unwrap()
        .filter_map(|e| {
            let path = e.ok()?.path();
            (path.extension()? == "html").then(|| path.file_stem()?.to_str().map(str::to_owned))?
        })
        .collect();
    samples.sort();
    assert!(samples.len() >= 5, "{samples:?}");
    let profile = tempfile::tempdir().unwrap();
    let mut checked = 0;
    for (sample, numbers) in demo_numbers(&terminal, &samples) {
        assert!(
            !numbers.is_empty(),
            "the demo printed no numbers for {sample}:\n{terminal}"
        );
        let page = pages.join(format!("{sample}.html"));
        let pdf = pages.join(format!("{sample}.pdf"));
        print_to_pdf(profile.path(), &page, &pdf);
        let text = pdf_text(&pdf);
        // The results come first, before the data they were computed from.
        let results = text.find("Results").unwrap_or(usize::MAX);
        let first_dataset = text.find("Imported from").unwrap_or(usize::MAX);
        assert!(
            results < first_dataset,
            "{sample}: the printed page does not start with its results"
        );
        let printed = numbers_in(&text);
        let missing: Vec<&(String, Printed)> = numbers.iter().filter(|(_, n)| !is_printed(*n, &printed)).collect();
        assert!(
            missing.is_empty(),
            "{sample}: numbers the demo prints are not in the printed page:\n{}",
            missing
                .iter()
                .map(|(line, n)| format!("  {} (line: {line})", n.value))
                .collect::<Vec<_>>()
                .join("\n")
        );
        checked += numbers.len();

        // Paper: the print style applied on screen at the text width of each paper (12 mm
        // margins: A4 186 mm = 703 px, Letter 191.9 mm = 725 px at 96 px per inch).
        for (paper, width, mode) in [
            ("screen", 1280, ""),
            ("A4", 703, "#print-check"),
            ("Letter", 725, "#print-check"),
        ] {
            let dump = headless_chromium(profile.path())
                .args(["--hide-scrollbars", "--virtual-time-budget=5000", "--dump-dom"])
                .arg(format!("--window-size={width},1400"))
                .arg(format!("file://{}{mode}", page.display()))
                .output()
                .expect("Chromium starts");
            let dom = String::from_utf8_lossy(&dump.stdout);
            let attribute = |name: &str| {
                html_attribute_text(&dom, name)
                    .unwrap_or_else(|| panic!("{sample} ({paper}): the page's script did not set {name}"))
            };
            let smallest: f64 = attribute("data-smallest-text-px").parse().unwrap();
            assert!(
                smallest >= 10.0,
                "{sample} ({paper}): figure text drawn at {smallest} px, under 10 px"
            );
            // Super- and subscripts (10^15, mu_H) are text a person reads too.
            if let Ok(raised) = attribute("data-smallest-raised-text-px").parse::<f64>() {
                assert!(
                    raised >= 10.0,
                    "{sample} ({paper}): a super- or subscript drawn at {raised} px, under 10 px"
                );
            }
            if mode.is_empty() {
                continue;
            }
            let tables: usize = attribute("data-tables").parse().unwrap();
            assert!(tables >= 1, "{sample} ({paper}): no table printed");
            assert_eq!(
                attribute("data-tables-clipped"),
                "",
                "{sample} ({paper}): tables wider than the paper"
            );
            let page_width: f64 = attribute("data-page-width").parse().unwrap();
            let content_width: f64 = attribute("data-content-width").parse().unwrap();
            assert!(
                content_width <= page_width,
                "{sample} ({paper}): the page is {content_width} px wide on {page_width} px of paper"
            );
        }
    }
    assert!(checked >= 100, "only {checked} numbers checked:\n{terminal}");
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

/// An output stored without a `sample` column (an ungrouped analysis of one sample's table)
/// belongs to the sample of its inputs, followed back through the analyses that made them;
/// an output of inputs that hold several samples belongs to none of them.
#[tokio::test(flavor = "multi_thread")]
async fn an_output_without_a_sample_column_is_reported_under_its_inputs_sample() {
    use serde_json::json;
    let dir = mobilis_tests::fixture_plugin_dir();
    let daemon = TestDaemon::start_with(|options| options.plugin_dirs.push(dir.path().to_owned())).await;
    for (name, samples) in [("one", ["W7", "W7"]), ("two", ["W7", "W8"])] {
        daemon
            .call(
                "dataset.import",
                json!({"name": name, "columns": {"sample": samples, "x": [1.0, 2.0]}}),
            )
            .await;
    }
    let scale = |input: &str, output: &str| json!({"analysis": "fixture.scale", "inputs": {"values": input}, "output": output, "params": {"factor": 2.0}});
    daemon.call("analysis.run", scale("one", "one-scaled")).await;
    // Two steps from the sample's table: the first output has no sample column either.
    daemon
        .call(
            "analysis.run",
            json!({"analysis": "fixture.identity", "inputs": {"values": "one-scaled"}, "output": "one-scaled-twice"}),
        )
        .await;
    daemon.call("analysis.run", scale("two", "two-scaled")).await;
    let rows = daemon.call("dataset.rows", json!({"name": "one-scaled-twice"})).await;
    assert!(rows["columns"].get("sample").is_none(), "{rows}");

    let samples = daemon.call("report.samples", json!({})).await;
    let datasets_of = |sample: &str| -> Vec<String> {
        samples
            .as_array()
            .unwrap()
            .iter()
            .find(|entry| entry["sample"] == sample)
            .map(|entry| serde_json::from_value(entry["datasets"].clone()).unwrap())
            .unwrap_or_default()
    };
    let mut w7 = datasets_of("W7");
    w7.sort();
    assert_eq!(w7, ["one", "one-scaled", "one-scaled-twice", "two"], "{samples}");
    assert_eq!(datasets_of("W8"), ["two"], "{samples}");
    let page = daemon.call("report.render", json!({"sample": "W7"})).await;
    let html = page["html"].as_str().unwrap_or_default();
    assert!(
        html.contains("one-scaled-twice") && !html.contains("two-scaled"),
        "{page}"
    );
}
