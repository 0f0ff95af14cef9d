//! Running Node.js from the tests: the JavaScript client's test suite and the JavaScript
//! notebook both run under `node` against a real daemon. Without Node.js 20 or later the
//! tests fail and say what to install; nothing is skipped.

use std::path::Path;
use std::process::{Command, ExitStatus, Stdio};
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// The major version of `node`, failing with what to install when there is none.
pub fn node_major_version() -> u32 {
    let output = Command::new("node").arg("--version").output().unwrap_or_else(|error| {
        panic!("these tests need Node.js 20 or later as `node` on PATH ({error}); install it, for example with `apt-get install nodejs npm`")
    });
    let version = String::from_utf8_lossy(&output.stdout).trim().to_owned();
    let major = version
        .trim_start_matches('v')
        .split('.')
        .next()
        .and_then(|major| major.parse().ok())
        .unwrap_or_else(|| panic!("cannot read the version `node --version` printed: {version:?}"));
    assert!(
        major >= 20,
        "the JavaScript client needs Node.js 20 or later; `node` is {version}"
    );
    major
}

/// `node`, with the flag that gives Node 20 and 21 their global WebSocket.
pub fn node_command() -> Command {
    let mut node = Command::new("node");
    if node_major_version() < 22 {
        node.arg("--experimental-websocket");
    }
    node
}

/// Runs `npm ci` in `dir` when its dependencies are not installed (a fresh clone).
///
/// The tests that need Node run in parallel threads of one process, and two `npm ci` runs in
/// the same directory would delete each other's `node_modules`: one install at a time, and
/// the later callers find the packages installed.
pub fn install_npm_dependencies(dir: &Path) {
    static ONE_AT_A_TIME: Mutex<()> = Mutex::new(());
    // A test that panicked while holding the lock left no lasting state but the directory,
    // which the check below looks at afresh.
    let _installing = ONE_AT_A_TIME.lock().unwrap_or_else(|poisoned| poisoned.into_inner());
    if dir.join("node_modules").is_dir() {
        return;
    }
    let output = Command::new("npm")
        .args(["ci", "--no-audit", "--no-fund"])
        .current_dir(dir)
        .output()
        .unwrap_or_else(|error| panic!("cannot run npm (installed with Node.js, `apt-get install npm`): {error}"));
    assert!(
        output.status.success(),
        "`npm ci` in {} failed:\n{}{}",
        dir.display(),
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
}

/// Runs `command` with its output collected, stopping it after `timeout`; returns its exit
/// status (`None` when it was stopped) and everything it printed.
pub fn run_with_timeout(mut command: Command, timeout: Duration) -> (Option<ExitStatus>, String) {
    let log = tempfile::NamedTempFile::new().expect("a temporary file for the output");
    let file = log.reopen().expect("a handle on the output file");
    command
        .stdin(Stdio::null())
        .stdout(file.try_clone().expect("a second handle"))
        .stderr(file);
    let mut child = command.spawn().expect("the command starts");
    let deadline = Instant::now() + timeout;
    let status = loop {
        if let Some(status) = child.try_wait().expect("waiting for the command") {
            break Some(status);
        }
        if Instant::now() > deadline {
            let _ = child.kill();
            let _ = child.wait();
            break None;
        }
        std::thread::sleep(Duration::from_millis(100));
    };
    (status, std::fs::read_to_string(log.path()).unwrap_or_default())
}
