//! Turns the Rust notebook's code cells into one Rust block that
//! `tests/tests/suite/notebooks.rs` compiles and runs, so the notebook cannot silently rot: a
//! cell that no longer compiles or fails against the real daemon fails the test suite.
//!
//! Kernel commands (lines starting with `:`, such as `:dep`) are left out; the test crate
//! already depends on what they load. The cells' `std::env::var` calls become calls of
//! `notebook_env`, which the test defines: the tests share one process, and setting the
//! process environment there would race with the other tests' threads and leak the test's
//! daemon address into every child process they start.

use std::path::Path;

fn main() {
    let notebook_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../notebooks/rust-client.ipynb");
    println!("cargo:rerun-if-changed={}", notebook_path.display());
    let text = std::fs::read_to_string(&notebook_path).expect("notebooks/rust-client.ipynb is readable");
    let notebook: serde_json::Value = serde_json::from_str(&text).expect("the notebook is JSON");
    let mut code = String::from("{\n");
    for (index, cell) in notebook["cells"].as_array().expect("a cells array").iter().enumerate() {
        if cell["cell_type"] != "code" {
            continue;
        }
        code.push_str(&format!("// cell {}\n", index + 1));
        let source: String = match &cell["source"] {
            serde_json::Value::Array(lines) => lines.iter().filter_map(|l| l.as_str()).collect(),
            serde_json::Value::String(text) => text.clone(),
            _ => String::new(),
        };
        for line in source.lines() {
            if !line.trim_start().starts_with(':') {
                code.push_str(&line.replace("std::env::var(", "notebook_env("));
                code.push('\n');
            }
        }
    }
    code.push_str("Ok::<(), Box<dyn std::error::Error>>(())\n}\n");
    let out = Path::new(&std::env::var("OUT_DIR").expect("cargo sets OUT_DIR")).join("rust_client_notebook.rs");
    std::fs::write(out, code).expect("write the notebook's code");
}
