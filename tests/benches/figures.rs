//! Speed and size of figures (`mobilis-plot`, as `plot.render` and `report.render` use it):
//!
//! - `hall_density` of a `hall.reduce`-shaped table of 100 samples x 625 temperatures
//!   (62 500 rows, one series per sample);
//! - `columns` of a million raw readings (voltage against temperature), where the drawing is
//!   thinned to at most 4000 markers per series;
//! - each as SVG and as a Vega-Lite specification, with the size of each.
//!
//! Run it with
//!
//! ```text
//! cargo bench -p mobilis-tests --bench figures
//! ```
//!
//! Each time is the wall time of one build-and-render after one untimed warm-up, median and
//! fastest of several repetitions.

use mobilis_plot::{FigureCatalog, PlotOptions};
use mobilis_sdk::figure_spec::FigureSpec;
use mobilis_tests::bench::{format_kib, format_seconds, invoked_as_benchmark, measure, peak_rss_kib};
use polars::prelude::*;

const BENCH: &str = "figures";

// `hall.reduce`'s figure declarations, read from the plugin's source as the daemon would get
// them from its declaration.
#[path = "../../plugins/hall/src/figures.rs"]
mod hall_figures;

/// The figures the bench draws by kind: those `hall.reduce` declares.
fn hall_declarations() -> &'static [FigureSpec] {
    static FIGURES: std::sync::OnceLock<Vec<FigureSpec>> = std::sync::OnceLock::new();
    FIGURES.get_or_init(hall_figures::reduce)
}

/// A table shaped like `hall.reduce` output: sample, temperature, density with uncertainty.
fn reduced_table(samples: usize, temperatures: usize) -> DataFrame {
    let rows = samples * temperatures;
    let mut sample = Vec::with_capacity(rows);
    let mut temperature = Vec::with_capacity(rows);
    let mut density = Vec::with_capacity(rows);
    let mut density_unc = Vec::with_capacity(rows);
    for s in 0..samples {
        for t in 0..temperatures {
            let kelvin = 20.0 + 380.0 * t as f64 / (temperatures - 1) as f64;
            let n = 3e21 * (1.0 + s as f64 * 1e-3) / (1.0 + (60.0 / kelvin).powi(4));
            sample.push(format!("S{s:03}"));
            temperature.push(kelvin);
            density.push(n);
            density_unc.push(0.01 * n);
        }
    }
    df!(
        "sample" => sample,
        "temperature_K" => temperature,
        "field_T" => vec![0.5; rows],
        "density_m3" => density,
        "density_m3_unc" => density_unc,
    )
    .expect("a consistent table")
}

/// A million raw readings: temperature and voltage columns only.
fn readings(rows: usize) -> DataFrame {
    let temperature: Vec<f64> = (0..rows).map(|i| 20.0 + 380.0 * (i % 625) as f64 / 624.0).collect();
    let voltage: Vec<f64> = temperature.iter().map(|t| 0.05 / (1.0 + t / 100.0)).collect();
    df!("temperature_K" => temperature, "voltage_V" => voltage).expect("a consistent table")
}

fn report(label: &str, frame: &DataFrame, options: &PlotOptions) {
    let mut catalog = FigureCatalog::new();
    catalog.add("hall.reduce", hall_declarations());
    let figure = mobilis_plot::build(frame, "bench", options, &catalog).expect("the figure builds");
    let svg_bytes = figure.to_svg().len();
    let vega_bytes = figure.to_vega_lite().to_string().len();
    let timing = measure(1, 5, || {
        let figure = mobilis_plot::build(frame, "bench", options, &catalog).expect("the figure builds");
        (figure.to_svg().len(), figure.to_vega_lite().to_string().len())
    });
    println!(
        "{label:<44} {} median, {} fastest; SVG {:.1} kB, Vega-Lite {:.1} kB",
        format_seconds(timing.median_s),
        format_seconds(timing.min_s),
        svg_bytes as f64 / 1e3,
        vega_bytes as f64 / 1e3
    );
}

fn main() {
    if !invoked_as_benchmark(BENCH) {
        return;
    }
    let hall = reduced_table(100, 625);
    report(
        "hall_density, 62 500 rows, 100 series",
        &hall,
        &PlotOptions {
            kind: Some("hall_density".into()),
            ..Default::default()
        },
    );
    let raw = readings(1_000_000);
    report(
        "columns, 1 000 000 readings, thinned",
        &raw,
        &PlotOptions {
            kind: Some("columns".into()),
            x: Some("temperature_K".into()),
            y: vec!["voltage_V".into()],
            ..Default::default()
        },
    );
    println!("peak RSS {}", format_kib(peak_rss_kib()));
}
