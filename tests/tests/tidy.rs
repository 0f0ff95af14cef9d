//! Tidiness checks of the source tree: every Rust file starts with a `//!` comment that says
//! what it is for (the contributor guide's rule), so that a reader of any file knows its job
//! before its code.

use mobilis_tests::workspace_root;
use std::path::{Path, PathBuf};

fn rust_files(directory: &Path, found: &mut Vec<PathBuf>) {
    let Ok(entries) = std::fs::read_dir(directory) else {
        return;
    };
    for entry in entries.flatten() {
        let path = entry.path();
        let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
        if path.is_dir() {
            if name != "target" && !name.starts_with('.') {
                rust_files(&path, found);
            }
        } else if name.ends_with(".rs") {
            found.push(path);
        }
    }
}

#[test]
fn every_rust_file_starts_with_a_module_doc_comment() {
    let root = workspace_root();
    let mut files = Vec::new();
    for top in ["core", "rpc", "plugins", "clients", "tests", "demo-data", "templates"] {
        rust_files(&root.join(top), &mut files);
    }
    assert!(files.len() > 50, "the walk found only {} files", files.len());
    let missing: Vec<String> = files
        .iter()
        .filter(|file| {
            let text = std::fs::read_to_string(file).unwrap_or_default();
            !text
                .lines()
                .find(|line| !line.trim().is_empty())
                .is_some_and(|line| line.starts_with("//!"))
        })
        .map(|file| file.strip_prefix(&root).unwrap_or(file).display().to_string())
        .collect();
    assert!(
        missing.is_empty(),
        "files without a leading //! doc comment: {missing:?}"
    );
}
