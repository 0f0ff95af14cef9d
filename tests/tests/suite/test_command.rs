//! `tests/run`, the test command, finds what is missing: run with `MOBILIS_NO_INSTALL=1` (list,
//! install nothing) under a `PATH` that holds only the basic tools plus a chosen set of
//! stand-ins, it names exactly the tools left out, and an old Node.js as too old.

use mobilis_tests::workspace_root;
use std::path::Path;
use std::process::Command;

/// The basic tools the script itself uses.
const BASICS: &[&str] = &[
    "bash", "env", "dirname", "id", "uname", "awk", "grep", "sed", "head", "cat", "mktemp", "rm", "mkdir",
];

/// A directory of links to the basic tools and of stand-ins for `present` (each prints
/// `version`), `node` printing `node_version`.
fn tool_directory(present: &[&str], node_version: &str) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    for tool in BASICS {
        let found = ["/usr/bin", "/bin"]
            .iter()
            .map(|d| Path::new(d).join(tool))
            .find(|p| p.exists())
            .unwrap_or_else(|| panic!("{tool} is not installed"));
        std::os::unix::fs::symlink(found, dir.path().join(tool)).unwrap();
    }
    for tool in present {
        let output = if *tool == "node" { node_version } else { "1.0" };
        let script = dir.path().join(tool);
        std::fs::write(&script, format!("#!/bin/sh\necho {output}\n")).unwrap();
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(&script, std::fs::Permissions::from_mode(0o755)).unwrap();
    }
    dir
}

/// Runs `tests/run` listing only; returns its exit success and its stderr.
fn check(present: &[&str], node_version: &str) -> (bool, String) {
    let tools = tool_directory(present, node_version);
    let home = tempfile::tempdir().unwrap();
    let output = Command::new(tools.path().join("bash"))
        .arg(workspace_root().join("tests/run"))
        .env_clear()
        .env("PATH", tools.path())
        .env("HOME", home.path())
        .env("MOBILIS_NO_INSTALL", "1")
        .output()
        .expect("tests/run starts");
    (
        output.status.success(),
        String::from_utf8_lossy(&output.stderr).into_owned(),
    )
}

#[test]
fn the_test_command_names_what_is_missing() {
    let all = ["cargo", "cc", "node", "npm", "chromium", "pdftotext"];
    // (tools present, node's version, what must be reported missing)
    let cases: &[(&[&str], &str, &[&str])] = &[
        (&all, "v22.1.0", &[]),
        (
            &["cc", "node", "npm", "chromium", "pdftotext"],
            "v22.1.0",
            &["Rust (rustup)"],
        ),
        (
            &["cargo", "node", "npm", "chromium", "pdftotext"],
            "v22.1.0",
            &["gcc libc6-dev"],
        ),
        (&["cargo", "cc", "chromium", "pdftotext"], "", &["nodejs npm"]),
        (&all, "v18.20.4", &["Node.js 20 or later (node is v18.20.4)"]),
        (&["cargo", "cc", "node", "npm", "pdftotext"], "v20.0.0", &["chromium"]),
        (
            &["cargo", "cc", "node", "npm", "chromium"],
            "v20.0.0",
            &["poppler-utils"],
        ),
    ];
    for (present, node_version, missing) in cases {
        let (ok, stderr) = check(present, node_version);
        assert_eq!(ok, missing.is_empty(), "{present:?}:\n{stderr}");
        let reported: Vec<&str> = stderr
            .lines()
            .filter_map(|line| line.strip_prefix("tests/run: missing: "))
            .collect();
        assert_eq!(&reported, missing, "{present:?}:\n{stderr}");
        if missing.is_empty() {
            assert!(stderr.contains("everything the tests need is installed"), "{stderr}");
        }
    }
}
