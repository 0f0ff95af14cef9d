//! Speed of the fitting analyses through the plugin ABI, as the daemon calls them:
//!
//! - `carriers.freeze_out_fit` on a temperature series of 100 points (20 K to 400 K) of an
//!   invented compensated n-type silicon sample, generated with the full charge-neutrality
//!   model of `mobilis_physics::forward::statistics` and 0.5 % noise;
//! - `spectrum.mobility` on a 200-point grid per carrier sign and 140 fields (two 70-point
//!   branches to 9 T), three invented carriers, 5e-4 noise, with its default 24 bootstrap
//!   replicas for the peak uncertainties;
//! - `spectrum.multi_carrier_fit` on the same sweep with automatic carrier selection;
//! - both spectrum analyses on long sweeps logged continuously at 10 Hz over a -14 T to 14 T
//!   ramp (10,000, 20,000 and 40,000 readings, the same three carriers and noise), with the
//!   peak resident memory of each call, to show that cost and memory stay bounded as the
//!   sweep grows (such sweeps are reduced onto a field grid first: the spectrum plugin's
//!   `reduction` module).
//!
//! Each figure is printed beside its goal. With `MOBILIS_BENCH_DUMP=DIR` the outputs of the
//! short cases (table and summary) are written to `DIR` as JSON, to compare results before
//! and after a change. `MOBILIS_BENCH_ONLY=TEXT` runs only the short cases whose label
//! contains TEXT (and no long sweep), and `MOBILIS_BENCH_REPEAT=N` times each of them N
//! times: a profiler then sees one analysis alone.
//!
//! Run it with
//!
//! ```text
//! cargo bench -p mobilis-tests --bench analyses
//! ```
//!
//! It builds the release plugin libraries first. Each figure is the wall time of one call
//! after one untimed warm-up, median and fastest of several repetitions.

use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::statistics::{solve_charge_neutrality, BandModel, Dopants};
use mobilis_physics::forward::tensor::{symmetric_fields, synthetic_sweep, Carrier, SweepImperfections, SweepNoise};
use mobilis_rpc::plugin_host::CallControl;
use mobilis_tests::bench::{
    build_release_plugins, fail, format_kib, format_seconds, invoked_as_benchmark, load_plugins, measure, peak_rss_kib,
};
use polars::prelude::*;
use serde_json::json;
use std::sync::Arc;

const BENCH: &str = "analyses";

/// 100 temperatures of an invented sample: N_D 3e15, N_A 2e14 cm^-3, E_D 45 meV.
fn temperature_series() -> DataFrame {
    let bands = BandModel::silicon();
    let dopants = Dopants::new(3e21, 2e20, 0.045, 0.045);
    let mut rng = Rng::seeded(100);
    let (mut temperatures, mut densities, mut uncertainties) = (Vec::new(), Vec::new(), Vec::new());
    for step in 0..100 {
        let temperature = 20.0 + 380.0 * step as f64 / 99.0;
        let equilibrium = solve_charge_neutrality(&dopants, &bands, temperature)
            .unwrap_or_else(|error| fail(BENCH, &format!("forward model: {error}")));
        let density = equilibrium.electron_density_m3 * (1.0 + 0.005 * rng.standard_normal());
        temperatures.push(temperature);
        densities.push(density);
        uncertainties.push(0.005 * density);
    }
    df!(
        "temperature_K" => temperatures,
        "density_m3" => densities,
        "density_m3_unc" => uncertainties,
        "carrier_type" => vec!["n"; 100],
    )
    .expect("columns of equal length")
}

/// A 140-field sweep of three invented carriers.
fn sweep() -> DataFrame {
    let carriers = [
        Carrier::electron(9e16, 1.5),
        Carrier::electron(2e17, 0.2),
        Carrier::hole(5e17, 0.05),
    ];
    let fields: Vec<f64> = symmetric_fields(9.0, 70)
        .unwrap_or_else(|error| fail(BENCH, &error.to_string()))
        .into_iter()
        .filter(|b| *b != 0.0)
        .collect();
    let noise = SweepNoise {
        absolute_ohm: 1e-3,
        relative: 5e-4,
    };
    let points = synthetic_sweep(
        &carriers,
        &fields,
        &noise,
        &SweepImperfections::default(),
        &mut Rng::seeded(140),
    )
    .unwrap_or_else(|error| fail(BENCH, &error.to_string()));
    df!(
        "field_T" => points.iter().map(|p| p.field_t).collect::<Vec<_>>(),
        "rho_xx_ohm_sq" => points.iter().map(|p| p.rho_xx_ohm_sq).collect::<Vec<_>>(),
        "rho_xy_ohm" => points.iter().map(|p| p.rho_xy_ohm).collect::<Vec<_>>(),
    )
    .expect("columns of equal length")
}

/// A continuous ramp from -14 T to 14 T logged `readings` times, of the same three carriers.
fn long_sweep(readings: usize) -> DataFrame {
    let carriers = [
        Carrier::electron(9e16, 1.5),
        Carrier::electron(2e17, 0.2),
        Carrier::hole(5e17, 0.05),
    ];
    let fields: Vec<f64> = (0..readings)
        .map(|i| -14.0 + 28.0 * i as f64 / (readings - 1) as f64)
        .collect();
    let noise = SweepNoise {
        absolute_ohm: 1e-3,
        relative: 5e-4,
    };
    let points = synthetic_sweep(
        &carriers,
        &fields,
        &noise,
        &SweepImperfections::default(),
        &mut Rng::seeded(readings as u64),
    )
    .unwrap_or_else(|error| fail(BENCH, &error.to_string()));
    df!(
        "field_T" => points.iter().map(|p| p.field_t).collect::<Vec<_>>(),
        "rho_xx_ohm_sq" => points.iter().map(|p| p.rho_xx_ohm_sq).collect::<Vec<_>>(),
        "rho_xy_ohm" => points.iter().map(|p| p.rho_xy_ohm).collect::<Vec<_>>(),
    )
    .expect("columns of equal length")
}

/// Resets the peak resident set to the current one (Linux `clear_refs`, value 5), so that
/// the peak of each long case is its own.
fn reset_peak_rss() {
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

/// Writes an output as JSON: the summary, the warnings and every column of the table.
fn dump(directory: &str, name: &str, output: &mobilis_rpc::plugin_host::InvokeSuccess) {
    let mut columns = serde_json::Map::new();
    for column in output.table.columns() {
        let values: Vec<serde_json::Value> = match column.cast(&DataType::Float64) {
            Ok(cast) => {
                let values = cast.f64().expect("cast to f64");
                (0..values.len())
                    .map(|i| values.get(i).map_or(serde_json::Value::Null, |v| json!(v)))
                    .collect()
            }
            Err(_) => vec![json!(format!("{column:?}"))],
        };
        columns.insert(column.name().to_string(), serde_json::Value::Array(values));
    }
    let document = json!({"summary": output.summary, "warnings": output.warnings, "columns": columns});
    let path = std::path::Path::new(directory).join(format!("{name}.json"));
    std::fs::write(&path, serde_json::to_string_pretty(&document).expect("JSON"))
        .unwrap_or_else(|error| fail(BENCH, &format!("{}: {error}", path.display())));
}

fn main() {
    if !invoked_as_benchmark(BENCH) {
        return;
    }
    let release = build_release_plugins(BENCH, &["mobilis-plugin-carriers", "mobilis-plugin-spectrum"]);
    let host = load_plugins(BENCH, &release, &["mobilis_carriers", "mobilis_spectrum"]);
    let control = Arc::new(CallControl::default());

    let series = vec![("hall".to_owned(), temperature_series())];
    let sweep = vec![("sweep".to_owned(), sweep())];
    let cases = [
        (
            "carriers.freeze_out_fit, 100 temperatures",
            "carriers.freeze_out_fit",
            json!({"material": "Si"}),
            &series,
            5,
            0.010,
        ),
        (
            "spectrum.mobility, 200-point grid, 140 fields",
            "spectrum.mobility",
            json!({"points_per_sign": 200}),
            &sweep,
            5,
            0.050,
        ),
        (
            "spectrum.multi_carrier_fit, 140 fields, automatic",
            "spectrum.multi_carrier_fit",
            json!({}),
            &sweep,
            3,
            0.100,
        ),
    ];
    let dump_directory = std::env::var("MOBILIS_BENCH_DUMP").ok();
    let only = std::env::var("MOBILIS_BENCH_ONLY").ok();
    let repeat: Option<usize> = std::env::var("MOBILIS_BENCH_REPEAT")
        .ok()
        .and_then(|text| text.parse().ok());
    println!("{:<52} {:>12} {:>12} {:>12}", "analysis", "median", "fastest", "goal");
    for (label, analysis, params, inputs, repetitions, goal_s) in cases {
        if only.as_ref().is_some_and(|text| !label.contains(text.as_str())) {
            continue;
        }
        let repetitions = repeat.unwrap_or(repetitions);
        if let Some(directory) = &dump_directory {
            let output = host
                .invoke(analysis, &params, inputs, &control)
                .unwrap_or_else(|failure| fail(BENCH, &format!("{analysis}: {}", failure.message)));
            dump(directory, analysis, &output);
        }
        let timing = measure(1, repetitions, || {
            host.invoke(analysis, &params, inputs, &control)
                .unwrap_or_else(|failure| fail(BENCH, &format!("{analysis}: {}", failure.message)))
        });
        println!(
            "{label:<52} {:>12} {:>12} {:>12}",
            format_seconds(timing.median_s),
            format_seconds(timing.min_s),
            format!("<= {}", format_seconds(goal_s)),
        );
    }

    if only.is_some() {
        return;
    }
    // Long sweeps: one untimed call, then the median of three; the peak resident set of
    // the process during the calls (reset before them, so it is theirs and the table's).
    println!();
    println!(
        "{:<52} {:>12} {:>12} {:>12} {:>14}",
        "long sweep (10 Hz ramp, -14 T to 14 T)", "median", "fastest", "goal", "peak RSS"
    );
    for readings in [10_000, 20_000, 40_000] {
        let sweep = vec![("sweep".to_owned(), long_sweep(readings))];
        for (analysis, params) in [
            ("spectrum.mobility", json!({})),
            ("spectrum.multi_carrier_fit", json!({})),
        ] {
            reset_peak_rss();
            let timing = measure(1, 3, || {
                host.invoke(analysis, &params, &sweep, &control)
                    .unwrap_or_else(|failure| {
                        fail(
                            BENCH,
                            &format!("{analysis} on {readings} readings: {}", failure.message),
                        )
                    })
            });
            let peak = format_kib(peak_rss_kib());
            println!(
                "{:<52} {:>12} {:>12} {:>12} {:>14}",
                format!("{analysis}, {readings} readings"),
                format_seconds(timing.median_s),
                format_seconds(timing.min_s),
                format!("<= {}", format_seconds(1.0)),
                peak,
            );
        }
    }
    println!("peak RSS {}", format_kib(peak_rss_kib()));
}
