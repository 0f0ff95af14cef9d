//! Headless Chromium for the tests that open pages: the report pages and the JS client's
//! browser test. Chromium comes from Debian's `chromium` package (`tests/run` installs it);
//! `$CHROMIUM` names another binary. Without one the tests fail and say what to install.

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
