//! Writing the daemon's report pages (`report.render`) to files, one per sample; shared by
//! `mobilis report` and `mobilis demo --reports`.

use anyhow::{bail, Context};
use mobilis_client::Client;
use mobilis_protocol::method;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// A sample name made safe as a file name: anything but letters, digits, `-`, `_` and `.` becomes `_`.
pub fn file_stem(sample: &str) -> String {
    let stem: String = sample
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || "-_.".contains(c) {
                c
            } else {
                '_'
            }
        })
        .collect();
    if stem.is_empty() || stem.starts_with('.') {
        format!("sample{stem}")
    } else {
        stem
    }
}

/// Writes `<out>/<sample>.html` for each of `samples` (every sample with data when empty)
/// and prints one line per page.
pub async fn write_reports(client: &Client, out: &Path, samples: &[String]) -> anyhow::Result<Vec<PathBuf>> {
    write_reports_as(client, out, samples, false).await
}

/// [`write_reports`], and with `pdf` also `<out>/<sample>.pdf` of each page printed by
/// headless Chromium. Without Chromium the pages are written and a message says what to
/// install.
pub async fn write_reports_as(
    client: &Client,
    out: &Path,
    samples: &[String],
    pdf: bool,
) -> anyhow::Result<Vec<PathBuf>> {
    let samples: Vec<String> = if samples.is_empty() {
        let known = client
            .request::<method::ReportSamples>(&mobilis_protocol::params::NoParams {})
            .await?;
        known.into_iter().map(|entry| entry.sample).collect()
    } else {
        samples.to_vec()
    };
    if samples.is_empty() {
        bail!("no stored dataset has a `sample` column; import data first (mobilis import, mobilis pipeline)");
    }
    std::fs::create_dir_all(out).with_context(|| format!("cannot create {}", out.display()))?;
    let browser = if pdf { chromium() } else { None };
    if pdf && browser.is_none() {
        let named = std::env::var_os("CHROMIUM")
            .map(|path| format!(" ($CHROMIUM names {}, which is not a file)", Path::new(&path).display()))
            .unwrap_or_default();
        eprintln!(
            "PDF not written: no Chromium found{named}. Install Debian's `chromium` package (or Chrome), or set $CHROMIUM to the browser's binary; the HTML pages are written and print from any browser."
        );
    }
    let mut written = Vec::with_capacity(samples.len());
    for sample in &samples {
        let page = client
            .request::<method::ReportRender>(&mobilis_protocol::params::SampleName { sample: sample.clone() })
            .await?;
        let path = out.join(format!("{}.html", file_stem(sample)));
        std::fs::write(&path, &page.html).with_context(|| format!("cannot write {}", path.display()))?;
        println!(
            "wrote {} ({} datasets, {} figures)",
            path.display(),
            page.datasets.len(),
            page.figures
        );
        if let Some(browser) = &browser {
            let pdf_path = path.with_extension("pdf");
            print_to_pdf(browser, &path, &pdf_path)?;
            println!("wrote {}", pdf_path.display());
            written.push(pdf_path);
        }
        written.push(path);
    }
    Ok(written)
}

/// The Chromium (or Chrome) binary: `$CHROMIUM`, else the usual names on the `PATH`.
pub fn chromium() -> Option<PathBuf> {
    if let Some(path) = std::env::var_os("CHROMIUM") {
        return Some(PathBuf::from(path)).filter(|p| p.is_file());
    }
    let path = std::env::var_os("PATH")?;
    ["chromium", "chromium-browser", "google-chrome", "google-chrome-stable"]
        .iter()
        .flat_map(|name| std::env::split_paths(&path).map(move |dir| dir.join(name)))
        .find(|candidate| candidate.is_file())
}

/// How long one page may take to print before the browser is stopped.
const PRINT_TIMEOUT: Duration = Duration::from_secs(120);

/// Prints `page` to `pdf` with headless Chromium: the page's own print style, no header or
/// footer lines, a throwaway profile.
pub fn print_to_pdf(browser: &Path, page: &Path, pdf: &Path) -> anyhow::Result<()> {
    let page = page
        .canonicalize()
        .with_context(|| format!("cannot find {}", page.display()))?;
    let profile = std::env::temp_dir().join(format!("mobilis-pdf-{}", std::process::id()));
    let _ = std::fs::remove_file(pdf);
    let mut child = Command::new(browser)
        .args([
            "--headless",
            // The page is this program's own, self-contained and without external resources.
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--no-pdf-header-footer",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .arg(format!("--print-to-pdf={}", pdf.display()))
        .arg(format!("file://{}", page.display()))
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .with_context(|| format!("cannot start {}", browser.display()))?;
    let started = Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait()? {
            break status;
        }
        if started.elapsed() > PRINT_TIMEOUT {
            let _ = child.kill();
            let _ = child.wait();
            let _ = std::fs::remove_dir_all(&profile);
            bail!(
                "{} did not print {} within {} s; the HTML page is written",
                browser.display(),
                page.display(),
                PRINT_TIMEOUT.as_secs()
            );
        }
        std::thread::sleep(Duration::from_millis(100));
    };
    let mut messages = String::new();
    if let Some(mut stderr) = child.stderr.take() {
        let _ = std::io::Read::read_to_string(&mut stderr, &mut messages);
    }
    let _ = std::fs::remove_dir_all(&profile);
    let printed = std::fs::metadata(pdf).map(|m| m.len() > 0).unwrap_or(false);
    if !status.success() || !printed {
        bail!(
            "{} could not print {} to PDF ({status}); the HTML page is written. Its messages:\n{}",
            browser.display(),
            page.display(),
            messages.trim()
        );
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sample_names_become_safe_file_names() {
        assert_eq!(file_stem("SiRef-centre"), "SiRef-centre");
        assert_eq!(file_stem("wafer 7/die 3"), "wafer_7_die_3");
        assert_eq!(file_stem("../x"), "sample.._x");
        assert_eq!(file_stem(""), "sample");
    }
}
