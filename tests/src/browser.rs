//! Headless Chromium for the tests that open pages: the report pages and the JS client's
//! browser test. Chromium comes from Debian's `chromium` package (`tests/run` installs it);
//! `$CHROMIUM` names another binary. Without one the tests fail and say what to install.
//! Likewise `pdftotext` (Debian's `poppler-utils`) for the tests that read printed pages.

use std::path::{Path, PathBuf};
use std::process::Command;

/// The browser binary.
pub fn chromium() -> PathBuf {
    if let Some(path) = std::env::var_os("CHROMIUM") {
        return PathBuf::from(path);
    }
    [
        "/usr/bin/chromium",
        "/usr/bin/chromium-browser",
        "/usr/bin/google-chrome",
    ]
    .iter()
    .map(PathBuf::from)
    .find(|path| path.is_file())
    .expect("no Chromium found: install Debian's `chromium` package (tests/run does) or set $CHROMIUM")
}

/// Headless Chromium with its own empty profile in `profile`. Background networking,
/// component updates and sync are off: a closed network refuses those connections, and a
/// test page needs none of them.
pub fn headless_chromium(profile: &Path) -> Command {
    let mut command = Command::new(chromium());
    command
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
        ])
        .arg(format!("--user-data-dir={}", profile.display()));
    command
}

/// Prints a local page to `pdf` with headless Chromium, as `mobilis report --pdf` does: the
/// page's own print style, no header or footer lines, US Letter (Chromium's default paper).
pub fn print_to_pdf(profile: &Path, page: &Path, pdf: &Path) {
    let output = headless_chromium(profile)
        .arg("--no-pdf-header-footer")
        .arg(format!("--print-to-pdf={}", pdf.display()))
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("Chromium starts");
    assert!(
        output.status.success() && pdf.is_file(),
        "Chromium did not print {}: {}",
        page.display(),
        String::from_utf8_lossy(&output.stderr)
    );
}

/// The text of a PDF file, by `pdftotext` from Debian's `poppler-utils` package (`$PDFTOTEXT`
/// names another binary). Without it the tests that read PDF files fail and say what to install.
pub fn pdf_text(pdf: &Path) -> String {
    let binary = std::env::var_os("PDFTOTEXT")
        .map(PathBuf::from)
        .or_else(|| {
            ["/usr/bin/pdftotext", "/usr/local/bin/pdftotext"]
                .iter()
                .map(PathBuf::from)
                .find(|path| path.is_file())
        })
        .expect("no pdftotext found: install Debian's `poppler-utils` package (apt-get install poppler-utils) or set $PDFTOTEXT");
    let output = Command::new(&binary)
        .args(["-enc", "UTF-8"])
        .arg(pdf)
        .arg("-")
        .output()
        .unwrap_or_else(|e| panic!("cannot run {}: {e}", binary.display()));
    assert!(
        output.status.success(),
        "pdftotext failed on {}: {}",
        pdf.display(),
        String::from_utf8_lossy(&output.stderr)
    );
    String::from_utf8_lossy(&output.stdout).into_owned()
}
