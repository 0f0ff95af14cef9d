//! Shared parts of the benchmark binaries (`tests/benches/*.rs`, run with `cargo bench -p
//! mobilis-tests`): building and loading the release plugin libraries, timing calls, and
//! reading the peak memory. Benchmarks measure; nothing here asserts on time.

use mobilis_rpc::plugin_host::PluginHost;
use std::hint::black_box;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Stops the benchmark with a message on stderr.
pub fn fail(bench: &str, message: &str) -> ! {
    eprintln!("{bench}: {message}");
    std::process::exit(1);
}

/// Cargo passes `--bench` to a bench binary under `cargo bench`; without it (for example under
/// `cargo test --all-targets`, in a debug build) a benchmark should only say how to run it.
pub fn invoked_as_benchmark(bench: &str) -> bool {
    let invoked = std::env::args().any(|argument| argument == "--bench");
    if !invoked {
        println!("{bench} is a benchmark: run it with `cargo bench -p mobilis-tests --bench {bench}`");
    }
    invoked
}

/// Builds plugin packages in release (`cargo bench` builds no cdylib that nothing links) and
/// returns the directory holding them, honouring `CARGO_TARGET_DIR`.
pub fn build_release_plugins(bench: &str, packages: &[&str]) -> PathBuf {
    let root = crate::workspace_root();
    let cargo = std::env::var_os("CARGO").unwrap_or_else(|| "cargo".into());
    // mobilis-rpc joins the build so that polars is built with the same features as in a
    // workspace build (`cargo build --release`), whose artefacts are then reused.
    let mut arguments = vec!["build", "--release", "-p", "mobilis-rpc"];
    for package in packages {
        arguments.extend(["-p", package]);
    }
    // Inherited output: a first release build takes minutes and its progress should show.
    let status = std::process::Command::new(&cargo)
        .args(&arguments)
        .current_dir(&root)
        .status()
        .unwrap_or_else(|error| fail(bench, &format!("cannot run {}: {error}", Path::new(&cargo).display())));
    if !status.success() {
        fail(
            bench,
            &format!(
                "`cargo {}` failed ({status}); see cargo's message above",
                arguments.join(" ")
            ),
        );
    }
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| root.join("target"));
    let target = if target.is_absolute() {
        target
    } else {
        root.join(target)
    };
    target.join("release")
}

/// Loads plugin libraries (by library name, e.g. `mobilis_hall`) from `directory`.
pub fn load_plugins(bench: &str, directory: &Path, lib_names: &[&str]) -> PluginHost {
    let mut host = PluginHost::default();
    for lib_name in lib_names {
        let file = directory.join(format!(
            "{}{lib_name}{}",
            std::env::consts::DLL_PREFIX,
            std::env::consts::DLL_SUFFIX
        ));
        if let Err(reason) = host.load(&file) {
            fail(bench, &format!("cannot load {}: {reason}", file.display()));
        }
    }
    host
}

/// Median and fastest wall time of a call.
#[derive(Debug, Clone, Copy)]
pub struct Timing {
    pub median_s: f64,
    pub min_s: f64,
}

/// Times `repetitions` calls after `warm_up` untimed ones; dropping a result is not timed.
pub fn measure<T>(warm_up: usize, repetitions: usize, mut call: impl FnMut() -> T) -> Timing {
    for _ in 0..warm_up {
        drop(black_box(call()));
    }
    let mut seconds: Vec<f64> = Vec::with_capacity(repetitions);
    for _ in 0..repetitions.max(1) {
        let started = Instant::now();
        let result = black_box(call());
        seconds.push(started.elapsed().as_secs_f64());
        drop(result);
    }
    seconds.sort_by(f64::total_cmp);
    Timing {
        median_s: seconds[seconds.len() / 2],
        min_s: seconds[0],
    }
}

/// A duration in the unit that keeps three or four significant digits in view.
pub fn format_seconds(seconds: f64) -> String {
    if seconds >= 1.0 {
        format!("{seconds:.3} s")
    } else if seconds >= 1e-3 {
        format!("{:.1} ms", seconds * 1e3)
    } else {
        format!("{:.1} µs", seconds * 1e6)
    }
}

/// The process's peak resident set size, KiB, where the platform reports it cheaply.
pub fn peak_rss_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|line| line.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

/// A peak RSS for a report.
pub fn format_kib(kib: Option<u64>) -> String {
    match kib {
        Some(kib) => format!("{:.0} MiB", kib as f64 / 1024.0),
        None => "n/a (no /proc/self/status)".into(),
    }
}

/// |a - b| / max(|a|, |b|), 0 when equal (both NaN included): how far a result moved
/// between a saved run and a later one.
pub fn relative_difference(a: f64, b: f64) -> f64 {
    if a == b || (a.is_nan() && b.is_nan()) {
        0.0
    } else {
        (a - b).abs() / a.abs().max(b.abs())
    }
}

/// The largest relative difference between two JSON values: numbers and strings that parse as
/// floats by relative difference, the rest exactly (a mismatch is added to `problems`).
/// Texts that differ only in printed numbers (warnings) compare their numbers.
pub fn compare_json(path: &str, saved: &serde_json::Value, now: &serde_json::Value, problems: &mut Vec<String>) -> f64 {
    use serde_json::Value;
    match (saved, now) {
        (Value::Number(a), Value::Number(b)) => match (a.as_f64(), b.as_f64()) {
            (Some(a), Some(b)) if a.fract() != 0.0 || b.fract() != 0.0 => relative_difference(a, b),
            _ if a == b => 0.0,
            _ => {
                problems.push(format!("{path}: {a} then {b}"));
                0.0
            }
        },
        (Value::String(a), Value::String(b)) if a != b => match (a.parse::<f64>(), b.parse::<f64>()) {
            (Ok(x), Ok(y)) => relative_difference(x, y),
            _ => {
                problems.push(format!("{path}: {a:?} then {b:?}"));
                0.0
            }
        },
        (Value::Array(a), Value::Array(b)) if a.len() == b.len() => a
            .iter()
            .zip(b)
            .enumerate()
            .map(|(index, (a, b))| compare_json(&format!("{path}[{index}]"), a, b, problems))
            .fold(0.0, f64::max),
        (Value::Object(a), Value::Object(b)) if a.len() == b.len() => {
            let mut largest = 0.0_f64;
            for (key, a_value) in a {
                match b.get(key) {
                    Some(b_value) => {
                        largest = largest.max(compare_json(&format!("{path}.{key}"), a_value, b_value, problems))
                    }
                    None => problems.push(format!("{path}.{key}: missing")),
                }
            }
            largest
        }
        _ if saved == now => 0.0,
        _ => {
            problems.push(format!("{path}: {saved} then {now}"));
            0.0
        }
    }
}

/// The columns of a table as JSON for a saved-output comparison: each column's name, dtype
/// and values, every cell a string (floats in Rust's shortest exact form, so that they read
/// back bit for bit) or null.
pub fn columns_as_json(table: &polars::prelude::DataFrame) -> Vec<serde_json::Value> {
    use polars::prelude::DataType;
    table
        .columns()
        .iter()
        .map(|column| {
            let values: Vec<serde_json::Value> = match column.dtype() {
                DataType::Float64 => column
                    .f64()
                    .expect("float column")
                    .iter()
                    .map(|v| v.map_or(serde_json::Value::Null, |v| format!("{v:?}").into()))
                    .collect(),
                _ => {
                    let text = column.cast(&DataType::String).expect("any column casts to text");
                    text.str()
                        .expect("text column")
                        .iter()
                        .map(|v| v.map_or(serde_json::Value::Null, |v| v.to_owned().into()))
                        .collect()
                }
            };
            serde_json::json!({"name": column.name().as_str(), "dtype": column.dtype().to_string(), "values": values})
        })
        .collect()
}
