//! Speed and memory of `mr.oscillations` through the plugin ABI, as the daemon calls it:
//!
//! - six sweeps of 4,000 points each (1.5 K to 10 K, 0.05 T to 14 T at a constant ramp
//!   rate) of an invented two-dimensional electron gas (F = 10 T, m* = 0.067 m0,
//!   T_D = 0.5 K) on a parabolic background, generated with
//!   `mobilis_physics::forward::oscillations` with 5 mOhm of noise;
//! - one sweep of 40,000 points at 1.5 K: a 0 to 14 T ramp logged continuously at 10 Hz;
//! - the peak memory of the call on one such ramp of 10,000, 20,000 and 40,000 points (the
//!   peak resident set is reset before each call), which should grow linearly.
//!
//! Run it with
//!
//! ```text
//! cargo bench -p mobilis-tests --bench oscillations
//! ```
//!
//! It builds the release plugin library first. Each figure is the wall time of one call
//! after one untimed warm-up, median and fastest of several repetitions, beside its goal.
//!
//! The result check: with `OSCILLATIONS_SAVE_OUTPUT=FILE` the outputs of a set of calls (the
//! two timed inputs with the defaults, and the short sweeps with a smoothing background, a
//! Blackman window with two lines and the fan, a rectangular window with other padding, and
//! a known mass) are written to FILE, every table column (floats in their exact shortest
//! form), the summary and the warnings; with `OSCILLATIONS_COMPARE_OUTPUT=FILE` they are
//! compared with a saved set, and the bench prints the largest relative difference and stops
//! if it exceeds 1e-12 or if any text, null or count differs. Save before a change to the
//! analysis, compare after. `OSCILLATIONS_CHECK_ONLY=1` runs the check without the timings.
//! `OSCILLATIONS_CASE=short` (or `long`) times that input alone and skips the memory runs,
//! which suits a profiler.

use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::oscillations::{synthetic_sdh_sweep, OscillationComponent, SdhModel};
use mobilis_physics::forward::tensor::SweepNoise;
use mobilis_rpc::plugin_host::{CallControl, PluginHost};
use mobilis_tests::bench::{
    self, build_release_plugins, compare_json, fail, format_kib, format_seconds, invoked_as_benchmark, load_plugins,
    measure, peak_rss_kib,
};
use polars::prelude::*;
use serde_json::json;
use std::sync::Arc;

const BENCH: &str = "oscillations";
const ANALYSIS: &str = "mr.oscillations";
/// Goals of the speed issue: six sweeps of 4,000 points, and one ramp of 40,000.
const GOAL_SHORT_S: f64 = 0.050;
const GOAL_LONG_S: f64 = 0.5;
const TEMPERATURES_K: [f64; 6] = [1.5, 2.5, 4.0, 6.0, 8.0, 10.0];

fn model() -> SdhModel {
    SdhModel {
        background_ohm_sq: vec![100.0, 0.0, 3.0, -0.1],
        components: vec![OscillationComponent {
            amplitude: 0.2,
            ..OscillationComponent::two_dimensional(10.0, 0.067, 0.5)
        }],
    }
}

/// Sweeps of `points` fields each from 0.05 T to 14 T, one per temperature, in the long
/// layout the daemon stores (a `temperature_K` column tells the sweeps apart).
fn sweeps(temperatures_k: &[f64], points: usize, seed: u64) -> DataFrame {
    let model = model();
    let noise = SweepNoise {
        absolute_ohm: 5e-3,
        relative: 0.0,
    };
    let mut rng = Rng::seeded(seed);
    let fields: Vec<f64> = (0..points)
        .map(|k| 0.05 + (14.0 - 0.05) * k as f64 / (points - 1) as f64)
        .collect();
    let (mut field, mut rho_xx, mut temperature) = (Vec::new(), Vec::new(), Vec::new());
    for &t in temperatures_k {
        let values = synthetic_sdh_sweep(&model, t, &fields, &noise, &mut rng)
            .unwrap_or_else(|error| fail(BENCH, &format!("forward model: {error}")));
        field.extend_from_slice(&fields);
        rho_xx.extend(values);
        temperature.extend(std::iter::repeat_n(t, points));
    }
    let rho_xy: Vec<f64> = field.iter().map(|b| -50.0 * b).collect();
    df!(
        "field_T" => field,
        "rho_xx_ohm_sq" => rho_xx,
        "rho_xy_ohm" => rho_xy,
        "temperature_K" => temperature,
    )
    .expect("columns of equal length")
}

/// Resets the peak resident set of this process to its current size (Linux, since 4.0);
/// false where that is not possible.
fn reset_peak_rss() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

fn current_rss_kib() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|line| line.starts_with("VmRSS:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn run(host: &PluginHost, control: &Arc<CallControl>, inputs: &[(String, DataFrame)]) {
    let output = host
        .invoke(ANALYSIS, &json!({}), inputs, control)
        .unwrap_or_else(|failure| fail(BENCH, &format!("{ANALYSIS}: {}", failure.message)));
    drop(std::hint::black_box(output));
}

const SAVE_OUTPUT_VARIABLE: &str = "OSCILLATIONS_SAVE_OUTPUT";
const COMPARE_OUTPUT_VARIABLE: &str = "OSCILLATIONS_COMPARE_OUTPUT";
const CHECK_ONLY_VARIABLE: &str = "OSCILLATIONS_CHECK_ONLY";
const CASE_VARIABLE: &str = "OSCILLATIONS_CASE";
/// The largest relative difference of a number allowed between two versions of the analysis
/// (the project's rule for a change that is meant to leave results alone).
const LARGEST_RELATIVE_CHANGE: f64 = 1e-12;

/// The calls whose outputs the result check keeps: (label, which input, parameters).
fn checked_calls() -> Vec<(&'static str, bool, serde_json::Value)> {
    vec![
        ("short, defaults", false, json!({})),
        ("long, defaults", true, json!({})),
        (
            "short, smoothing background",
            false,
            json!({"background": "smoothing", "background_width_per_T": 0.02}),
        ),
        (
            "short, blackman, two lines, fan",
            false,
            json!({"window": "blackman", "frequencies": 2, "landau_fan": true, "temperature_stability_K": 0.01}),
        ),
        (
            "short, rectangular, padding 3, narrow windows",
            false,
            json!({"window": "rectangular", "zero_padding": 3, "mass_method": "narrow_windows", "background_degree": 5}),
        ),
        (
            "long, known mass, padding 16",
            true,
            json!({"mass": "known", "effective_mass_ratio": 0.067, "zero_padding": 16}),
        ),
    ]
}

/// A call's outcome as JSON: every column (cells as strings, floats in Rust's shortest
/// exact form so that they read back bit for bit, or null), the summary and the warnings;
/// or the failure message.
fn outcome_as_json(
    host: &PluginHost,
    control: &Arc<CallControl>,
    inputs: &[(String, DataFrame)],
    params: &serde_json::Value,
) -> serde_json::Value {
    let output = match host.invoke(ANALYSIS, params, inputs, control) {
        Ok(output) => output,
        Err(failure) => return json!({"failure": failure.message}),
    };
    let columns = bench::columns_as_json(&output.table);
    json!({"columns": columns, "summary": output.summary, "warnings": output.warnings})
}

/// Writes and compares the outputs of [`checked_calls`] as the environment asks (see
/// [`SAVE_OUTPUT_VARIABLE`]); a mismatch stops the bench.
fn save_or_compare_output(
    host: &PluginHost,
    control: &Arc<CallControl>,
    short: &[(String, DataFrame)],
    long: &[(String, DataFrame)],
) {
    let saved_path = std::env::var_os(SAVE_OUTPUT_VARIABLE);
    let compare_path = std::env::var_os(COMPARE_OUTPUT_VARIABLE);
    if saved_path.is_none() && compare_path.is_none() {
        return;
    }
    let now: serde_json::Map<String, serde_json::Value> = checked_calls()
        .into_iter()
        .map(|(label, is_long, params)| {
            let inputs = if is_long { long } else { short };
            (label.to_owned(), outcome_as_json(host, control, inputs, &params))
        })
        .collect();
    let now = serde_json::Value::Object(now);
    if let Some(path) = saved_path {
        std::fs::write(&path, now.to_string())
            .unwrap_or_else(|error| fail(BENCH, &format!("cannot write {}: {error}", path.to_string_lossy())));
        println!("outputs of {ANALYSIS} saved to {}", path.to_string_lossy());
    }
    let Some(path) = compare_path else { return };
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|error| fail(BENCH, &format!("cannot read {}: {error}", path.to_string_lossy())));
    let saved: serde_json::Value = serde_json::from_str(&text)
        .unwrap_or_else(|error| fail(BENCH, &format!("{}: {error}", path.to_string_lossy())));
    let mut problems = Vec::new();
    for (label, _, _) in checked_calls() {
        let change = compare_json(label, &saved[label], &now[label], &mut problems);
        println!("output compared ({label}): largest relative difference {change:.3e}");
    }
    let largest = compare_json("", &saved, &now, &mut Vec::new());
    for problem in problems.iter().take(20) {
        eprintln!("  {problem}");
    }
    println!(
        "outputs compared with {}: largest relative difference {largest:.3e} (goal <= {LARGEST_RELATIVE_CHANGE:e}), {} texts, nulls or counts differ",
        path.to_string_lossy(),
        problems.len()
    );
    if largest > LARGEST_RELATIVE_CHANGE || !problems.is_empty() {
        fail(BENCH, &format!("the output of {ANALYSIS} changed"));
    }
}

fn verdict(seconds: f64, goal: f64) -> &'static str {
    if seconds <= goal {
        "met"
    } else {
        "NOT met"
    }
}

fn main() {
    if !invoked_as_benchmark(BENCH) {
        return;
    }
    let release = build_release_plugins(BENCH, &["mobilis-plugin-magnetoresistance"]);
    let host = load_plugins(BENCH, &release, &["mobilis_magnetoresistance"]);
    let control = Arc::new(CallControl::default());

    let short = vec![("sweep".to_owned(), sweeps(&TEMPERATURES_K, 4_000, 6))];
    let long = vec![("sweep".to_owned(), sweeps(&TEMPERATURES_K[..1], 40_000, 40))];
    save_or_compare_output(&host, &control, &short, &long);
    if std::env::var_os(CHECK_ONLY_VARIABLE).is_some() {
        return;
    }
    println!(
        "{:<44} {:>10} {:>10} {:>10}  ",
        "mr.oscillations", "median", "fastest", "goal"
    );
    let case = std::env::var(CASE_VARIABLE).ok();
    for (name, label, inputs, repetitions, goal) in [
        ("short", "6 sweeps x 4,000 points", &short, 7, GOAL_SHORT_S),
        ("long", "1 sweep x 40,000 points (10 Hz, 0-14 T)", &long, 3, GOAL_LONG_S),
    ] {
        if case.as_deref().is_some_and(|case| case != name) {
            continue;
        }
        let timing = measure(1, repetitions, || run(&host, &control, inputs));
        println!(
            "{label:<44} {:>10} {:>10} {:>10}  {}",
            format_seconds(timing.median_s),
            format_seconds(timing.min_s),
            format!("<= {}", format_seconds(goal)),
            verdict(timing.median_s, goal)
        );
    }

    if case.is_some() {
        return;
    }
    // Memory against the sweep length: the peak above the resident set before the call.
    println!(
        "{:<44} {:>10} {:>10}",
        "peak memory of one call", "above RSS", "per point"
    );
    for points in [10_000, 20_000, 40_000] {
        let inputs = vec![("sweep".to_owned(), sweeps(&TEMPERATURES_K[..1], points, points as u64))];
        // The allocator keeps what the timed calls freed and would serve this call from it,
        // so the peak would not rise at all: hand it back first.
        mobilis_rpc::store::memory::return_freed_memory();
        let before = current_rss_kib();
        if !reset_peak_rss() {
            println!("{points:>6} points: the peak resident set cannot be reset here");
            continue;
        }
        run(&host, &control, &inputs);
        match (peak_rss_kib(), before) {
            (Some(peak), Some(before)) => {
                let above = peak.saturating_sub(before);
                println!(
                    "{:<44} {:>10} {:>10}",
                    format!("1 sweep x {points} points"),
                    format_kib(Some(above)),
                    format!("{:.0} B", above as f64 * 1024.0 / points as f64)
                );
            }
            _ => println!("{points:>6} points: no /proc/self/status"),
        }
    }
    println!("peak RSS {}", format_kib(peak_rss_kib()));
}
