//! The integration tests stay one binary: every file under `tests/tests` is a module of
//! `tests/tests/suite/main.rs`. Cargo makes each `tests/tests/*.rs` its own binary, which
//! would link the whole daemon again, and it silently ignores a file under `suite/` that no
//! `mod` line names, so a test written there would never run.

use mobilis_tests::workspace_root;
use std::path::{Path, PathBuf};

/// The `.rs` files under `directory`, recursively.
fn rust_files(directory: &Path, found: &mut Vec<PathBuf>) {
    for entry in std::fs::read_dir(directory).unwrap_or_else(|e| panic!("{}: {e}", directory.display())) {
        let path = entry.expect("a directory entry").path();
        if path.is_dir() {
            rust_files(&path, found);
        } else if path.extension().is_some_and(|extension| extension == "rs") {
            found.push(path);
        }
    }
}

/// The module names declared by `mod NAME;` lines of `file`.
fn declared_modules(file: &Path) -> Vec<String> {
    std::fs::read_to_string(file)
        .unwrap_or_else(|e| panic!("{}: {e}", file.display()))
        .lines()
        .filter_map(|line| {
            let line = line.trim();
            let line = line.strip_prefix("pub ").unwrap_or(line);
            line.strip_prefix("mod ")?.strip_suffix(';').map(str::to_owned)
        })
        .collect()
}

#[test]
fn every_integration_test_file_is_a_module_of_the_one_suite_binary() {
    let tests = workspace_root().join("tests/tests");
    let suite = tests.join("suite");
    let mut stray = Vec::new();
    for entry in std::fs::read_dir(&tests).unwrap().flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        if name != "suite" {
            stray.push(name);
        }
    }
    assert!(
        stray.is_empty(),
        "tests/tests holds {stray:?} beside suite/: move each test file into tests/tests/suite/ \
         (`git mv`) and add `mod NAME;` to tests/tests/suite/main.rs, so that it is part of the \
         one test binary"
    );

    let mut files = Vec::new();
    rust_files(&suite, &mut files);
    let mut undeclared = Vec::new();
    for file in &files {
        if file.file_name().is_some_and(|name| name == "main.rs") && file.parent() == Some(suite.as_path()) {
            continue;
        }
        // `suite/a.rs` is declared in `suite/main.rs`; `suite/a/b.rs` in `suite/a.rs`.
        let stem = file.file_stem().unwrap().to_string_lossy().into_owned();
        let parent_dir = file.parent().unwrap();
        let declaring = if parent_dir == suite {
            suite.join("main.rs")
        } else {
            parent_dir.with_extension("rs")
        };
        if !declaring.is_file() || !declared_modules(&declaring).contains(&stem) {
            undeclared.push(
                file.strip_prefix(workspace_root())
                    .unwrap_or(file)
                    .display()
                    .to_string(),
            );
        }
    }
    assert!(
        undeclared.is_empty(),
        "{undeclared:?} are not modules of the suite, so their tests never run: add `mod NAME;` \
         to the file of the folder above (tests/tests/suite/main.rs for a file in suite/)"
    );
}
