//! `mobilis demo`: starts a real `mobilisd` (which loads the plugin libraries built next to
//! it), runs the demo pipeline on the invented demo data through JSON-RPC, and prints the
//! results per sample and temperature in the trade's units beside the invented truth.

use crate::pipeline_file;
use crate::progress_bar::{ProgressBar, ProgressMode};
use crate::summary::plus_minus_json;
use crate::table::format_number;
use anyhow::{bail, Context};
use mobilis_client::{Client, Daemon, DaemonOptions};
use mobilis_protocol::method;
use mobilis_protocol::params::RowsParams;
use serde_json::Value;
use std::path::PathBuf;

/// The demo-data directory of the source tree this binary was built from.
fn default_data_directory() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../demo-data")
}

pub async fn run(
    data: Option<PathBuf>,
    workspace: Option<PathBuf>,
    reports: Option<PathBuf>,
    progress: ProgressMode,
) -> anyhow::Result<()> {
    let data = data.unwrap_or_else(default_data_directory);
    let data = data
        .canonicalize()
        .with_context(|| format!("demo data not found at {}", data.display()))?;
    let temporary;
    let workspace = match workspace {
        Some(dir) => dir,
        None => {
            temporary = std::env::temp_dir().join(format!("mobilis-demo-{}", std::process::id()));
            temporary
        }
    };
    let daemon = Daemon::spawn(&DaemonOptions {
        workspace: Some(workspace.clone()),
        data_roots: vec![data.clone()],
        working_directory: Some(data.clone()),
        ..DaemonOptions::default()
    })?;
    let outcome = run_with_daemon(&daemon, &data, reports.as_deref(), progress).await;
    daemon.stop();
    if std::env::temp_dir().join(format!("mobilis-demo-{}", std::process::id())) == workspace {
        let _ = std::fs::remove_dir_all(&workspace);
    }
    outcome
}

async fn run_with_daemon(
    daemon: &Daemon,
    data: &std::path::Path,
    reports: Option<&std::path::Path>,
    progress: ProgressMode,
) -> anyhow::Result<()> {
    let client = Client::connect(daemon.url(), None).await?;
    let info = client
        .request::<method::ServerInfoMethod>(&mobilis_protocol::params::NoParams {})
        .await?;
    println!("mobilisd {} at {}", info.version, daemon.url());
    for plugin in &info.plugins {
        println!("  plugin {} {} (loaded dynamically)", plugin.name, plugin.version);
    }
    if info.plugins.is_empty() {
        bail!("the daemon loaded no plugins; build them with `cargo build --release` (or `cargo build`)");
    }
    println!();
    println!("Demo data (invented): {}", data.display());
    println!(
        "Every ± below is one standard uncertainty (coverage factor k = 1): the scatter of the data and the calibrations the lab stated, in quadrature."
    );
    let mut bar = ProgressBar::new(progress);
    let steps = pipeline_file::run(&client, &data.join("pipeline.toml"), |event| bar.update(event)).await?;
    drop(bar);
    for step in &steps {
        println!("  step -> {} ({} rows)", step.output, step.rows);
    }
    // The summaries are the plugins' own objects; they are read as JSON below.
    let steps: Vec<Value> = steps
        .iter()
        .map(|step| serde_json::to_value(step).expect("a run result serialises"))
        .collect();
    let truth: Value = serde_json::from_str(&std::fs::read_to_string(data.join("si-wafer/truth.json"))?)?;
    let rows = |name: &str, limit: Option<usize>| RowsParams {
        name: name.to_owned(),
        offset: 0,
        limit,
    };
    let page = client
        .request::<method::DatasetRows>(&rows("si-hall", Some(10_000)))
        .await?;
    print_hall_table(&Value::Object(page.columns), &truth);
    let summary = |name: &'static str| {
        let client = &client;
        async move {
            client
                .request::<method::DatasetRows>(&rows(name, None))
                .await
                .map(|page| Value::Object(page.columns))
        }
    };
    let freeze_out = summary("si-freeze-out-summary").await?;
    let arrhenius = summary("si-arrhenius-summary").await?;
    let scattering = summary("si-scattering-summary").await?;
    let purity = summary("si-purity").await?;
    print_purity(&freeze_out, &arrhenius, &scattering, &purity, &truth);
    for (directory, fit_output, spectrum_output) in [
        ("heterostructure", "hemt-carriers", "hemt-spectrum"),
        ("inas-film", "inas-carriers", "inas-spectrum"),
    ] {
        let truth: Value = serde_json::from_str(&std::fs::read_to_string(data.join(directory).join("truth.json"))?)?;
        let step = |output: &str| steps.iter().find(|s| s["output"] == output).cloned();
        if let (Some(fit), Some(spectrum)) = (step(fit_output), step(spectrum_output)) {
            print_carriers(&fit, &spectrum, &truth);
        }
    }
    let find = |output: &str| steps.iter().find(|s| s["output"] == output).cloned();
    let read_truth =
        |file: &str| -> anyhow::Result<Value> { Ok(serde_json::from_str(&std::fs::read_to_string(data.join(file))?)?) };
    let oscillation_truth = read_truth("heterostructure/truth-sdh.json")?;
    let film_truth = read_truth("thin-film/truth.json")?;
    if let (Some(oscillations), Some(weak)) = (find("hemt-oscillations"), find("film-weak-localization")) {
        print_quantum(&oscillations, &oscillation_truth, &weak, &film_truth);
    }
    match reports {
        Some(directory) => {
            println!();
            println!("Reports, one self-contained page per sample:");
            crate::report_files::write_reports(&client, directory, &[]).await?;
        }
        None => {
            println!();
            println!(
                "`mobilis demo --reports DIR` also writes each sample's HTML report (figures, tables, provenance)."
            );
        }
    }
    Ok(())
}

fn print_quantum(oscillations: &Value, oscillation_truth: &Value, weak: &Value, film_truth: &Value) {
    let summary = &oscillations["summary"]["groups"][0]["summary"];
    let sdh = &oscillation_truth["oscillations"];
    println!();
    println!(
        "Sample {} quantum transport (magnetoresistance plugin), invented truth in brackets",
        summary["sample"].as_str().unwrap_or("?")
    );
    let row = |label: &str, name: &str, factor: f64, truth: &Value| {
        println!(
            "  {label:<28} {:>24}  [{}]",
            plus_minus_json(&summary[name], &summary[format!("{name}_unc")], factor),
            number(truth, factor)
        );
    };
    let kelvin_list = |values: Vec<f64>| values.iter().map(|t| format!("{t}")).collect::<Vec<_>>().join(", ");
    let found: Vec<f64> = summary["temperatures_K"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(Value::as_f64)
        .collect();
    let measured: Vec<f64> = sdh["temperatures"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|t| t["temperature_K"].as_f64())
        .collect();
    println!(
        "  {:<28} {:>24}  [{}]",
        "sweeps at (K)",
        kelvin_list(found.iter().map(|t| (t * 100.0).round() / 100.0).collect()),
        kelvin_list(measured)
    );
    row("SdH frequency (T)", "frequency_T", 1.0, &sdh["frequency_T"]);
    row("2D density (cm^-2)", "sheet_density_m2", 1e-4, &sdh["sheet_density_m2"]);
    row(
        "effective mass (m*/m0)",
        "effective_mass_ratio",
        1.0,
        &sdh["effective_mass_ratio"],
    );
    row(
        "Dingle temperature (K)",
        "dingle_temperature_K",
        1.0,
        &sdh["dingle_temperature_K"],
    );
    row(
        "quantum lifetime (ps)",
        "quantum_lifetime_s",
        1e12,
        &sdh["quantum_lifetime_s"],
    );
    let weak_summary = &weak["summary"]["groups"][0]["summary"];
    let wl = &film_truth["weak_localization"];
    println!();
    println!(
        "Sample {} weak localization at 2 K (mr.weak_localization), invented truth in brackets",
        weak_summary["sample"].as_str().unwrap_or("?")
    );
    println!(
        "  {:<28} {:>24}  [{}]",
        "phase-coherence length (nm)",
        plus_minus_json(
            &weak_summary["phase_coherence_length_m"],
            &weak_summary["phase_coherence_length_m_unc"],
            1e9
        ),
        number(&wl["phase_coherence_length_m"], 1e9)
    );
    println!(
        "  {:<28} {:>24}  [{}]",
        "HLN prefactor alpha",
        plus_minus_json(&weak_summary["alpha"], &weak_summary["alpha_unc"], 1.0),
        number(&wl["alpha"], 1.0)
    );
}

/// One carrier as `n 9.000e12 cm^-2 at 15000 cm^2/(V s)`.
fn describe_carrier(carrier: &Value, density: &str, mobility: &str) -> String {
    format!(
        "{} {} cm^-2 at {} cm^2/(V s)",
        carrier["carrier_type"].as_str().unwrap_or("?"),
        number(&carrier[density], 1e-4),
        number(&carrier[mobility], 1e4)
    )
}

fn print_carriers(fit: &Value, spectrum: &Value, truth: &Value) {
    let groups = |result: &Value| result["summary"]["groups"].as_array().cloned().unwrap_or_default();
    for group in groups(fit) {
        let sample = group["group"]["sample"].as_str().unwrap_or("?");
        let temperature = group["group"]["temperature_K"].as_f64().unwrap_or(f64::NAN);
        println!();
        println!(
            "Sample {sample} at {} K: carriers from the field sweep (spectrum plugin)",
            format_number(temperature)
        );
        let true_carriers = truth["samples"]
            .as_array()
            .and_then(|samples| samples.iter().find(|s| s["sample"] == sample))
            .and_then(|s| s["temperatures"].as_array())
            .and_then(|ts| {
                ts.iter()
                    .find(|t| (t["temperature_K"].as_f64().unwrap_or(f64::NAN) - temperature).abs() < 0.5)
            })
            .map(|t| t["carriers"].as_array().cloned().unwrap_or_default())
            .unwrap_or_default();
        for carrier in &true_carriers {
            println!(
                "  invented truth         {}",
                describe_carrier(carrier, "sheet_density_m2", "mobility_m2_per_Vs")
            );
        }
        for carrier in group["summary"]["carriers"].as_array().into_iter().flatten() {
            println!(
                "  multi-carrier fit      {} {} cm^-2 at {} cm^2/(V s)",
                carrier["carrier_type"].as_str().unwrap_or("?"),
                plus_minus_json(&carrier["sheet_density_m2"], &carrier["sheet_density_m2_unc"], 1e-4),
                plus_minus_json(&carrier["mobility_m2_per_Vs"], &carrier["mobility_m2_per_Vs_unc"], 1e4)
            );
        }
        let peaks = groups(spectrum)
            .into_iter()
            .find(|g| g["group"] == group["group"])
            .map(|g| g["summary"]["peaks"].as_array().cloned().unwrap_or_default())
            .unwrap_or_default();
        for peak in &peaks {
            println!(
                "  mobility spectrum peak {}",
                describe_carrier(peak, "sheet_density_m2", "mobility_m2_per_Vs")
            );
        }
        for warning in group["warnings"].as_array().into_iter().flatten() {
            println!("  note: {}", warning.as_str().unwrap_or(""));
        }
    }
}

/// `value ± uncertainty` of row `row` of a summary table, scaled into display units.
fn with_uncertainty(columns: &Value, name: &str, row: usize, factor: f64) -> String {
    plus_minus_json(&columns[name][row], &columns[format!("{name}_unc")][row], factor)
}

/// The row of `sample` in a summary table.
fn row_of(columns: &Value, sample: &str) -> Option<usize> {
    columns["sample"].as_array()?.iter().position(|s| s == sample)
}

fn print_purity(freeze_out: &Value, arrhenius: &Value, scattering: &Value, purity: &Value, truth: &Value) {
    println!();
    println!(
        "Donors, acceptors and the donor level (carriers.freeze_out_fit, carriers.arrhenius), true values in brackets"
    );
    println!(
        "{:<14} {:>24} {:>10} {:>24} {:>10} {:>18} {:>7} {:>18}",
        "sample", "N_D (cm^-3)", "[true]", "N_A (cm^-3)", "[true]", "E_D (meV)", "[true]", "Arrhenius E (meV)"
    );
    for sample in truth["samples"].as_array().into_iter().flatten() {
        let name = sample["sample"].as_str().unwrap_or("?");
        let Some(row) = row_of(freeze_out, name) else { continue };
        let arrhenius_energy = row_of(arrhenius, name)
            .map(|r| with_uncertainty(arrhenius, "activation_energy_eV", r, 1e3))
            .unwrap_or_else(|| "-".into());
        println!(
            "{:<14} {:>24} {:>10} {:>24} {:>10} {:>18} {:>7} {:>18}",
            name,
            with_uncertainty(freeze_out, "dopant_density_m3", row, 1e-6),
            format!("[{}]", number(&sample["donor_density_m3"], 1e-6)),
            with_uncertainty(freeze_out, "compensating_density_m3", row, 1e-6),
            format!("[{}]", number(&sample["acceptor_density_m3"], 1e-6)),
            with_uncertainty(freeze_out, "ionization_energy_eV", row, 1e3),
            format!("[{}]", number(&sample["donor_ionization_energy_eV"], 1e3)),
            arrhenius_energy,
        );
    }
    println!();
    println!("Mobility scattering and purity (carriers.mobility_scattering, carriers.purity)");
    println!(
        "{:<14} {:>18} {:>7} {:>22} {:>10} {:>18} {:>12}  counts agree",
        "sample", "lattice exponent", "[true]", "N_A from mobility", "net doping", "N_A / N_D", "N_D + N_A"
    );
    let true_exponent = number(&truth["mobility_model"]["lattice_exponent"], 1.0);
    for sample in truth["samples"].as_array().into_iter().flatten() {
        let name = sample["sample"].as_str().unwrap_or("?");
        let (Some(s), Some(p)) = (row_of(scattering, name), row_of(purity, name)) else {
            continue;
        };
        println!(
            "{:<14} {:>18} {:>7} {:>22} {:>10} {:>18} {:>12}  {}",
            name,
            with_uncertainty(scattering, "lattice_exponent", s, 1.0),
            format!("[{true_exponent}]"),
            with_uncertainty(scattering, "compensating_density_m3", s, 1e-6),
            number(&purity["net_doping_m3"][p], 1e-6),
            with_uncertainty(purity, "compensation_ratio", p, 1.0),
            number(&purity["total_impurity_density_m3"][p], 1e-6),
            match purity["freeze_out_consistent"][p].as_bool() {
                Some(true) => "yes",
                Some(false) => "NO",
                None => "-",
            }
        );
    }
    println!();
    println!("Densities in cm^-3. Every number above was computed from the raw readings by mobilisd and its plugins.");
}

fn column<'a>(columns: &'a Value, name: &str) -> Vec<&'a Value> {
    columns[name].as_array().map(|a| a.iter().collect()).unwrap_or_default()
}

fn number(value: &Value, factor: f64) -> String {
    value
        .as_f64()
        .map(|v| format_number(v * factor))
        .unwrap_or_else(|| "-".into())
}

/// The truth of one sample at the setpoint nearest to `temperature`.
fn truth_at<'a>(truth: &'a Value, sample: &str, temperature: f64) -> Option<&'a Value> {
    let sample = truth["samples"].as_array()?.iter().find(|s| s["sample"] == sample)?;
    sample["temperatures"].as_array()?.iter().min_by(|a, b| {
        let da = (a["temperature_K"].as_f64().unwrap_or(f64::MAX) - temperature).abs();
        let db = (b["temperature_K"].as_f64().unwrap_or(f64::MAX) - temperature).abs();
        da.total_cmp(&db)
    })
}

fn print_hall_table(columns: &Value, truth: &Value) {
    let samples = column(columns, "sample");
    let temperature = column(columns, "temperature_K");
    let sheet = column(columns, "sheet_resistance_ohm_sq");
    let resistivity = column(columns, "resistivity_ohm_m");
    let carrier = column(columns, "carrier_type");
    let density = column(columns, "density_m3");
    let density_unc = column(columns, "density_m3_unc");
    let mobility = column(columns, "hall_mobility_m2_per_Vs");
    let mobility_unc = column(columns, "hall_mobility_m2_per_Vs_unc");
    let flags = column(columns, "flags");
    let mut current_sample = None;
    for row in 0..samples.len() {
        let sample = samples[row].as_str().unwrap_or("?");
        if current_sample != Some(sample) {
            current_sample = Some(sample);
            println!();
            println!("Sample {sample}: hall.reduce per temperature (true values of the invented scenario in brackets)");
            println!(
                "{:>7}  {:>10}  {:>10}  {:>4}  {:>22}  {:>11}  {:>20}  {:>9}  flags",
                "T (K)", "R_s (ohm)", "rho (ohm cm)", "type", "n (cm^-3)", "[true n]", "mu_H (cm^2/(V s))", "[true]"
            );
        }
        let t = temperature[row].as_f64().unwrap_or(f64::NAN);
        let true_row = truth_at(truth, sample, t);
        let true_n = true_row
            .map(|r| number(&r["electron_density_m3"], 1e-6))
            .unwrap_or_else(|| "-".into());
        let true_mu = true_row
            .map(|r| number(&r["hall_mobility_m2_per_Vs"], 1e4))
            .unwrap_or_else(|| "-".into());
        println!(
            "{:>7}  {:>10}  {:>12}  {:>4}  {:>22}  {:>11}  {:>20}  {:>9}  {}",
            format_number(t),
            number(sheet[row], 1.0),
            number(resistivity[row], 100.0),
            carrier[row].as_str().unwrap_or("-"),
            plus_minus_json(density[row], density_unc[row], 1e-6),
            format!("[{true_n}]"),
            plus_minus_json(mobility[row], mobility_unc[row], 1e4),
            format!("[{true_mu}]"),
            flags[row].as_str().filter(|f| !f.is_empty()).unwrap_or("ok"),
        );
    }
}
