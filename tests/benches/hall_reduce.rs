//! Throughput of `hall.reduce` on a million raw readings, and what the plugin boundary
//! costs for a table of that size.
//!
//! Run it with
//!
//! ```text
//! cargo bench -p mobilis-tests --bench hall_reduce
//! ```
//!
//! It first builds the release plugin libraries it loads (`cargo build --release -p
//! mobilis-plugin-hall -p mobilis-test-fixture`, into `target/release` or
//! `$CARGO_TARGET_DIR/release`) and stops with cargo's message if that fails. It then
//! generates, with the forward models of `mobilis_core::forward` and a fixed seed, a
//! temperature run of 100 compensated n-type silicon van der Pauw pieces at 625 temperatures
//! (26 K to 650 K), 16 readings each (8 resistance readings at zero field, 8 Hall readings
//! at +-0.5 T): 1,000,000 readings with voltmeter noise, thermoelectric offsets, Hall
//! misalignment, controller jitter and the six lab wirings. The sample sheet (thickness,
//! Hall factor) goes in as the `samples` table.
//!
//! Every figure is the wall time of one call, after one untimed warm-up call, over several
//! timed repetitions; the table gives the median and the fastest. Dropping a call's result
//! is not timed.
//!
//! - (a) `hall.reduce` through `PluginHost::invoke`, as the daemon calls it: export of the
//!   readings, their import in the plugin, the reduction, the export of the 62,500-row
//!   result and its import in the host. The rate is input readings per second.
//! - (b) `fixture.identity` through `PluginHost::invoke` on the same readings: the table is
//!   exported, imported by the plugin, exported back unchanged and imported by the host, so
//!   this is the whole cost of the boundary (both ways) for this table, with no compute.
//! - (c) `table_ffi::export_frame` followed by `table_ffi::import_frame` in the same
//!   process: one crossing without a plugin, the reference for (b), which makes two.
//! - (b') and (c'): the same without the `sample` column. Every column crosses without a
//!   copy (text as Arrow string views, see `mobilis_core::table_ffi`), so the difference
//!   between (b) and (b') is what the text column costs: one buffer more, no copy.
//!
//! - (a-iso) and (b-iso): (a) and (b) with the plugins isolated, as the daemon runs a
//!   `--plugin-dir` library: the call goes to a worker process (`mobilisd --plugin-worker`,
//!   the release binary), inputs and output cross its pipes as Arrow IPC. The difference to
//!   (a) and (b) is the cost of isolation.
//!
//! Peak RSS is the process's high-water mark (`VmHWM` of `/proc/self/status`; Linux only),
//! read after the dataset is built and at the end, so that the second figure shows what the
//! calls added on top of the data.
//!
//! Cargo passes `--bench` to the binary under `cargo bench`; without it (for example under
//! `cargo test --all-targets`, in a debug build) the binary only says how to run it.

use mobilis_core::forward::mobility::hall_scattering_factor;
use mobilis_core::forward::readings::{
    van_der_pauw_readings, CurrentReversal, MeasurementProtocol, VanDerPauwSample, VoltageNoise, VoltmeterWiring,
};
use mobilis_core::forward::statistics::{BandModel, Dopants};
use mobilis_core::forward::transport::{n_type_transport, MobilityModel};
use mobilis_core::noise::Rng;
use mobilis_core::table_ffi;
use mobilis_rpc::plugin_host::{CallControl, PluginHost};
use mobilis_rpc::plugin_supervisor::WorkerSettings;
use mobilis_tests::bench::{self, format_kib, format_seconds, peak_rss_kib, Timing};
use polars::prelude::*;
use std::sync::Arc;
use std::time::Instant;

const BENCH: &str = "hall_reduce";

/// The seed of every random number of the dataset.
const SEED: u64 = 0xB3AC_4A11_2025;
const SAMPLE_COUNT: usize = 100;
/// Setpoints every 1 K from here: twice the default temperature tolerance of `hall.reduce`
/// (0.5 K), so that controller jitter never merges two steps into one row.
const FIRST_SETPOINT_K: f64 = 26.0;
const SETPOINT_COUNT: usize = 625;
const READINGS_PER_TEMPERATURE: usize = 16;
const HALL_FIELD_T: f64 = 0.5;

/// cm^-3 to m^-3.
const PER_CM3: f64 = 1e6;
/// Phosphorus donors, boron acceptors, eV.
const DONOR_IONIZATION_EV: f64 = 0.045;
const ACCEPTOR_IONIZATION_EV: f64 = 0.045;
/// Voltmeter noise: 0.5 uV floor plus 1e-4 of the reading.
const NOISE: VoltageNoise = VoltageNoise {
    absolute_v: 0.5e-6,
    relative: 1e-4,
};
/// Standard deviation of the temperature controller about its setpoint, K.
const CONTROLLER_JITTER_K: f64 = 0.02;
/// Thermoelectric offsets are drawn uniformly within +- this, V: a few microvolts, as in a
/// cryostat with well-anchored leads. Tens of microvolts against the few millivolts the
/// source's 1-2-5 steps leave would raise `current_reversal` and `large_offset` on most
/// rows, and the benchmark is meant to time the common, mostly clean case.
const THERMOELECTRIC_OFFSET_LIMIT_V: f64 = 10e-6;
/// The voltage the lab aims for when it picks the current, V.
const TARGET_VOLTAGE_V: f64 = 10e-3;
/// Currents the source offers, A: 1-2-5 steps from 1 nA to 1 mA.
const CURRENT_LADDER_A: [f64; 19] = [
    1e-9, 2e-9, 5e-9, 1e-8, 2e-8, 5e-8, 1e-7, 2e-7, 5e-7, 1e-6, 2e-6, 5e-6, 1e-5, 2e-5, 5e-5, 1e-4, 2e-4, 5e-4, 1e-3,
];
/// Every way a lab reverses the current and wires the voltmeter; the pieces take turns, so
/// the reduction's canonicalisation sees all of them.
const WIRINGS: [(CurrentReversal, VoltmeterWiring); 6] = [
    (CurrentReversal::SourceSign, VoltmeterWiring::Canonical),
    (CurrentReversal::SwapLeads, VoltmeterWiring::FollowsCurrentLeads),
    (CurrentReversal::SourceSign, VoltmeterWiring::Reversed),
    (CurrentReversal::SwapLeads, VoltmeterWiring::Canonical),
    (CurrentReversal::SourceSign, VoltmeterWiring::FollowsCurrentLeads),
    (CurrentReversal::SwapLeads, VoltmeterWiring::Reversed),
];

/// Untimed calls before the timed ones: the first call pays for page faults, lazy
/// initialisation and the plugins' thread pools.
const WARM_UP: usize = 1;
/// Odd, so that the median is one measured call.
const REDUCE_REPETITIONS: usize = 7;
const BOUNDARY_REPETITIONS: usize = 11;

fn main() {
    if !bench::invoked_as_benchmark(BENCH) {
        return;
    }

    let release = bench::build_release_plugins(BENCH, &["mobilis-plugin-hall", "mobilis-test-fixture"]);
    let host = bench::load_plugins(BENCH, &release, &["mobilis_hall", "test_fixture_plugin"]);
    let worker_program = release.join(format!("mobilisd{}", std::env::consts::EXE_SUFFIX));
    let mut isolated_host = PluginHost::default().with_workers(WorkerSettings::new(
        worker_program,
        std::time::Duration::from_secs(3600),
    ));
    for lib_name in ["mobilis_hall", "test_fixture_plugin"] {
        let file = release.join(format!(
            "{}{lib_name}{}",
            std::env::consts::DLL_PREFIX,
            std::env::consts::DLL_SUFFIX
        ));
        if let Err(reason) = isolated_host.load_isolated(&file) {
            fail(&format!("cannot load {} isolated: {reason}", file.display()));
        }
    }

    let started = Instant::now();
    let (readings, sheet) = generate();
    let generation_s = started.elapsed().as_secs_f64();
    let reading_count = readings.height();
    let peak_after_generation = peak_rss_kib();
    println!(
        "dataset: {reading_count} readings ({SAMPLE_COUNT} samples x {SETPOINT_COUNT} temperatures x {READINGS_PER_TEMPERATURE}), generated in {generation_s:.2} s"
    );

    let control = Arc::new(CallControl::default());
    let no_params = serde_json::json!({});
    let reduce_inputs = vec![("readings".to_owned(), readings.clone()), ("samples".to_owned(), sheet)];
    let numeric = readings
        .drop("sample")
        .unwrap_or_else(|error| fail(&format!("cannot drop the sample column: {error}")));

    let invoke_in = |host: &PluginHost, analysis: &str, inputs: &[(String, DataFrame)]| {
        host.invoke(analysis, &no_params, inputs, &control)
            .unwrap_or_else(|failure| {
                fail(&format!(
                    "{analysis} failed (status {}): {}",
                    failure.status, failure.message
                ))
            })
    };
    let invoke = |analysis: &str, inputs: &[(String, DataFrame)]| invoke_in(&host, analysis, inputs);
    let invoke_isolated = |analysis: &str, inputs: &[(String, DataFrame)]| invoke_in(&isolated_host, analysis, inputs);

    // Checked once, untimed: a figure for a call that returned the wrong thing means nothing.
    let reduced = invoke("hall.reduce", &reduce_inputs);
    let output_rows = reduced.table.height();
    let flagged_rows = reduced.summary["flagged_rows"].as_i64().unwrap_or(-1);
    let flag_counts = reduced.summary["flag_counts"].to_string();
    drop(reduced);
    let identity_inputs = vec![("values".to_owned(), readings.clone())];
    let numeric_inputs = vec![("values".to_owned(), numeric.clone())];
    let echoed = invoke("fixture.identity", &identity_inputs);
    if !echoed.table.equals_missing(&readings) {
        fail("fixture.identity did not return its input table unchanged");
    }
    drop(echoed);
    let isolated_reduced = invoke_isolated("hall.reduce", &reduce_inputs);
    if isolated_reduced.table.height() != output_rows {
        fail("hall.reduce in a worker returned another number of rows than in process");
    }
    drop(isolated_reduced);
    println!("hall.reduce: {output_rows} output rows, {flagged_rows} of them flagged {flag_counts}");

    let reduce = bench::measure(WARM_UP, REDUCE_REPETITIONS, || invoke("hall.reduce", &reduce_inputs));
    let identity = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
        invoke("fixture.identity", &identity_inputs)
    });
    let identity_numeric = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
        invoke("fixture.identity", &numeric_inputs)
    });
    let reduce_isolated = bench::measure(WARM_UP, REDUCE_REPETITIONS, || {
        invoke_isolated("hall.reduce", &reduce_inputs)
    });
    let identity_isolated = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || {
        invoke_isolated("fixture.identity", &identity_inputs)
    });
    let in_process = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || round_trip(&readings));
    let in_process_numeric = bench::measure(WARM_UP, BOUNDARY_REPETITIONS, || round_trip(&numeric));
    let peak_at_end = peak_rss_kib();

    println!();
    println!(
        "{:<58} {:>11} {:>11} {:>16}",
        "figure (one call)", "median", "min", "readings/s"
    );
    let line = |label: &str, timing: &Timing| {
        println!(
            "{:<58} {:>11} {:>11} {:>16.3e}",
            label,
            format_seconds(timing.median_s),
            format_seconds(timing.min_s),
            reading_count as f64 / timing.median_s
        );
    };
    line("(a)  hall.reduce via PluginHost::invoke", &reduce);
    line("(a-iso) hall.reduce in an isolated worker", &reduce_isolated);
    line("(b)  fixture.identity via PluginHost::invoke", &identity);
    line("(b-iso) fixture.identity in an isolated worker", &identity_isolated);
    line("(b') fixture.identity, without the sample column", &identity_numeric);
    line("(c)  export_frame + import_frame in-process", &in_process);
    line(
        "(c') export_frame + import_frame, without the sample column",
        &in_process_numeric,
    );
    println!(
        "timed calls: {REDUCE_REPETITIONS} for (a) and (a-iso), {BOUNDARY_REPETITIONS} for the others, each after {WARM_UP} warm-up; {} columns, {} numeric",
        readings.width(),
        numeric.width()
    );
    let signed = |seconds: f64| {
        let sign = if seconds < 0.0 { "-" } else { "+" };
        format!("{sign}{}", format_seconds(seconds.abs()))
    };
    println!(
        "cost of isolation (median, isolated minus in process): hall.reduce {} per call ({:+.1} %), the boundary both ways {}",
        signed(reduce_isolated.median_s - reduce.median_s),
        100.0 * (reduce_isolated.median_s / reduce.median_s - 1.0),
        signed(identity_isolated.median_s - identity.median_s)
    );
    println!(
        "peak RSS (VmHWM): {} after generating the dataset, {} at the end",
        format_kib(peak_after_generation),
        format_kib(peak_at_end)
    );
}

/// Stops the benchmark with a message on stderr.
fn fail(message: &str) -> ! {
    bench::fail(BENCH, message)
}

/// The readings table and the sample sheet.
fn generate() -> (DataFrame, DataFrame) {
    let bands = BandModel::silicon();
    // The Hall factor a lab would type for acoustic-phonon scattering, 3 pi / 8 rounded;
    // the sheet gives the reduction the same value, so its densities are the true ones.
    let hall_factor = (hall_scattering_factor(-0.5) * 100.0).round() / 100.0;
    let model = MobilityModel {
        hall_factor,
        ..MobilityModel::silicon_electrons()
    };
    let mut rng = Rng::seeded(SEED);

    let capacity = SAMPLE_COUNT * SETPOINT_COUNT * READINGS_PER_TEMPERATURE;
    let mut sample_index: Vec<u32> = Vec::with_capacity(capacity);
    let mut temperature_k: Vec<f64> = Vec::with_capacity(capacity);
    let mut field_t: Vec<f64> = Vec::with_capacity(capacity);
    let mut contacts: [Vec<i64>; 4] = std::array::from_fn(|_| Vec::with_capacity(capacity));
    let mut current_a: Vec<f64> = Vec::with_capacity(capacity);
    let mut voltage_v: Vec<f64> = Vec::with_capacity(capacity);
    let mut names: Vec<String> = Vec::with_capacity(SAMPLE_COUNT);
    let mut thicknesses_m: Vec<f64> = Vec::with_capacity(SAMPLE_COUNT);

    for index in 0..SAMPLE_COUNT {
        // Donors log-uniform over two decades, 5e14 to 5e16 cm^-3, compensated by 2 to 15 %
        // acceptors: lightly doped epitaxial and bulk silicon, frozen out at the cold end.
        let donor_density_m3 = 5e14 * PER_CM3 * 100f64.powf(rng.uniform());
        let acceptor_density_m3 = donor_density_m3 * rng.uniform_between(0.02, 0.15);
        let thickness_m = rng.uniform_between(300e-6, 650e-6);
        let resistance_ratio_b_over_a = rng.uniform_between(1.0, 1.4);
        let misalignment_fraction = rng.uniform_between(-0.04, 0.04);
        let (current_reversal, voltmeter_wiring) = WIRINGS[index % WIRINGS.len()];
        let name = format!("Si-{index:03}");
        let dopants = Dopants::new(
            donor_density_m3,
            acceptor_density_m3,
            DONOR_IONIZATION_EV,
            ACCEPTOR_IONIZATION_EV,
        );

        for step in 0..SETPOINT_COUNT {
            let setpoint_k = FIRST_SETPOINT_K + step as f64;
            // The lab records the controller's reading to 1 mK once per step.
            let temperature = ((setpoint_k + CONTROLLER_JITTER_K * rng.standard_normal()) * 1000.0).round() / 1000.0;
            let layer = n_type_transport(&dopants, &bands, thickness_m, temperature, &model)
                .unwrap_or_else(|error| fail(&format!("transport model of {name} at {temperature} K: {error}")));
            let misalignment_ohm = misalignment_fraction * layer.sheet_resistance_ohm_sq;
            let mut offsets_v = [0.0; 6];
            for offset in &mut offsets_v {
                *offset = rng.uniform_between(-THERMOELECTRIC_OFFSET_LIMIT_V, THERMOELECTRIC_OFFSET_LIMIT_V);
            }
            let sample = VanDerPauwSample {
                thermoelectric_offsets_v: offsets_v,
                hall_misalignment_ohm: [misalignment_ohm, -misalignment_ohm],
                ..VanDerPauwSample::ideal(
                    name.as_str(),
                    temperature,
                    layer.sheet_resistance_ohm_sq,
                    resistance_ratio_b_over_a,
                    layer.sheet_hall_coefficient_m2_per_c,
                )
            };
            let (resistance_a, resistance_b) = sample
                .characteristic_resistances_ohm()
                .unwrap_or_else(|error| fail(&format!("{name} at {temperature} K: {error}")));
            let hall_ohm = layer.sheet_hall_coefficient_m2_per_c.abs() * HALL_FIELD_T + misalignment_ohm.abs();
            let protocol = MeasurementProtocol {
                current_reversal,
                voltmeter_wiring,
                noise: NOISE,
                ..MeasurementProtocol::van_der_pauw(
                    choose_current_a(resistance_a.max(resistance_b).max(hall_ohm)),
                    vec![HALL_FIELD_T],
                )
            }
            .with_resistance_at_zero_and_hall_in_field();
            let readings = van_der_pauw_readings(&sample, &protocol, &mut rng)
                .unwrap_or_else(|error| fail(&format!("readings of {name} at {temperature} K: {error}")));
            if readings.len() != READINGS_PER_TEMPERATURE {
                fail(&format!(
                    "the protocol gave {} readings per temperature, {READINGS_PER_TEMPERATURE} expected",
                    readings.len()
                ));
            }
            for reading in readings {
                sample_index.push(index as u32);
                temperature_k.push(reading.temperature_k);
                field_t.push(reading.field_t);
                contacts[0].push(reading.i_in);
                contacts[1].push(reading.i_out);
                contacts[2].push(reading.v_pos);
                contacts[3].push(reading.v_neg);
                current_a.push(reading.current_a);
                voltage_v.push(reading.voltage_v);
            }
        }
        names.push(name);
        thicknesses_m.push(thickness_m);
    }

    let sample: Vec<&str> = sample_index
        .iter()
        .map(|&index| names[index as usize].as_str())
        .collect();
    let [i_in, i_out, v_pos, v_neg] = contacts;
    let height = sample.len();
    let readings = DataFrame::new(
        height,
        vec![
            Column::new("sample".into(), sample),
            Column::new("temperature_K".into(), temperature_k),
            Column::new("field_T".into(), field_t),
            Column::new("i_in".into(), i_in),
            Column::new("i_out".into(), i_out),
            Column::new("v_pos".into(), v_pos),
            Column::new("v_neg".into(), v_neg),
            Column::new("current_A".into(), current_a),
            Column::new("voltage_V".into(), voltage_v),
        ],
    )
    .unwrap_or_else(|error| fail(&format!("cannot build the readings table: {error}")));
    let sheet = DataFrame::new(
        SAMPLE_COUNT,
        vec![
            Column::new("sample".into(), names),
            Column::new("thickness_m".into(), thicknesses_m),
            Column::new("hall_factor".into(), vec![hall_factor; SAMPLE_COUNT]),
        ],
    )
    .unwrap_or_else(|error| fail(&format!("cannot build the sample sheet: {error}")));
    (readings, sheet)
}

/// The largest current of the ladder that keeps the largest |V| at or below the target, as
/// a lab picks it.
fn choose_current_a(largest_resistance_ohm: f64) -> f64 {
    let wanted = TARGET_VOLTAGE_V / largest_resistance_ohm;
    CURRENT_LADDER_A
        .iter()
        .copied()
        .rev()
        .find(|&current| current <= wanted)
        .unwrap_or(CURRENT_LADDER_A[0])
}

/// One crossing of the boundary in-process: export, then import into a new DataFrame.
fn round_trip(frame: &DataFrame) -> DataFrame {
    let (schema, array) =
        table_ffi::export_frame(frame).unwrap_or_else(|error| fail(&format!("export_frame failed: {error}")));
    // SAFETY: both structures were just exported from a live DataFrame of this process, and
    // their release callbacks are this binary's own code.
    unsafe { table_ffi::import_frame(&schema, array) }
        .unwrap_or_else(|error| fail(&format!("import_frame failed: {error}")))
}
