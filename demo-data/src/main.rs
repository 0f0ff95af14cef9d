//! `mobilis-demo-gen`: writes the invented demo scenario of mobilis.
//!
//! Usage: `mobilis-demo-gen [DIR]` (default `demo-data`). It writes, always the same bytes
//! for the same program (fixed seeds, rounded numbers):
//!
//! - `DIR/si-wafer/readings.csv`: raw van der Pauw readings, the `readings` role of
//!   `hall.reduce`;
//! - `DIR/si-wafer/samples.csv`: thickness and Hall factor per piece, the `samples` role;
//! - `DIR/si-wafer/truth.json`: the invented true parameters the readings were made from;
//! - `DIR/heterostructure/sweeps.csv` and `DIR/inas-film/sweeps.csv`: field sweeps of the
//!   AlGaN/GaN heterostructure and of the InAs film, the `sweep` role;
//! - `DIR/heterostructure/truth.json` and `DIR/inas-film/truth.json`: the invented carriers
//!   the sweeps were made from;
//! - `DIR/heterostructure/sdh-sweeps.csv`: the heterostructure from 1 T to 9 T at six
//!   temperatures from 2 K to 10 K, with the Shubnikov-de Haas oscillations of its channel;
//! - `DIR/heterostructure/truth-sdh.json`: the invented oscillation parameters of that file;
//! - `DIR/thin-film/wl-sweep.csv`: a thin disordered GaN film at 2 K below 0.1 T, with its
//!   weak-localization cusp;
//! - `DIR/thin-film/truth.json`: the invented film and weak-localization parameters of that
//!   file.
//!
//! The data are made up; see `README.md` next to this crate. The physics is
//! `mobilis_physics::forward`, the same models the plugins fit.

mod format;
mod heterostructure;
mod inas_film;
mod quantum;
mod si_wafer;
mod sweeps;
mod thin_film;
mod weak_localization;

use anyhow::Context as _;
use std::path::{Path, PathBuf};

/// One file of the scenario: its directory under the demo-data root, its name and its bytes.
struct DemoFile {
    directory: &'static str,
    name: &'static str,
    contents: String,
}

/// The wafers measured in the magnet, each written to its own directory.
const SWEPT_WAFERS: [&sweeps::Wafer; 2] = [&heterostructure::WAFER, &inas_film::WAFER];

/// Generates the whole scenario in memory: every file, and one summary line per directory.
fn demo_files() -> anyhow::Result<(Vec<DemoFile>, Vec<String>)> {
    let mut files = Vec::new();
    let mut summaries = Vec::new();

    let silicon = si_wafer::generate()?;
    let si_directory = "si-wafer";
    files.push(DemoFile {
        directory: si_directory,
        name: "readings.csv",
        contents: si_wafer::readings_csv(&silicon.readings),
    });
    files.push(DemoFile {
        directory: si_directory,
        name: "samples.csv",
        contents: si_wafer::samples_csv(&silicon.sample_rows),
    });
    files.push(DemoFile {
        directory: si_directory,
        name: "truth.json",
        contents: silicon.truth.to_pretty_string(),
    });
    summaries.push(format!(
        "{} readings of {} samples at {} temperatures in {si_directory}",
        silicon.readings.len(),
        silicon.sample_rows.len(),
        silicon.temperature_count,
    ));

    for wafer in SWEPT_WAFERS {
        let generated = sweeps::generate(wafer)?;
        files.push(DemoFile {
            directory: wafer.directory,
            name: "sweeps.csv",
            contents: sweeps::sweeps_csv(&generated.rows),
        });
        files.push(DemoFile {
            directory: wafer.directory,
            name: "truth.json",
            contents: generated.truth.to_pretty_string(),
        });
        summaries.push(format!(
            "{} sweep points in {} sweeps in {}",
            generated.rows.len(),
            generated.sweep_count,
            wafer.directory
        ));
    }

    let quantum = quantum::generate(&heterostructure::QUANTUM)?;
    let quantum_directory = heterostructure::QUANTUM.directory;
    files.push(DemoFile {
        directory: quantum_directory,
        name: "sdh-sweeps.csv",
        contents: sweeps::sweeps_csv(&quantum.sdh_rows),
    });
    files.push(DemoFile {
        directory: quantum_directory,
        name: "truth-sdh.json",
        contents: quantum.truth.to_pretty_string(),
    });
    summaries.push(format!(
        "{} oscillation sweep points at {} temperatures in {quantum_directory}",
        quantum.sdh_rows.len(),
        heterostructure::QUANTUM.sdh_temperatures_k.len(),
    ));

    let film = weak_localization::generate(&thin_film::FILM)?;
    let film_directory = thin_film::FILM.directory;
    files.push(DemoFile {
        directory: film_directory,
        name: "wl-sweep.csv",
        contents: sweeps::sweeps_csv(&film.rows),
    });
    files.push(DemoFile {
        directory: film_directory,
        name: "truth.json",
        contents: film.truth.to_pretty_string(),
    });
    summaries.push(format!(
        "{} weak-localization sweep points in {film_directory}",
        film.rows.len()
    ));
    Ok((files, summaries))
}

/// Generates the scenario and writes its files under `root`; returns the summary.
fn write_demo_data(root: &Path) -> anyhow::Result<String> {
    let (files, summaries) = demo_files()?;
    for file in &files {
        let directory = root.join(file.directory);
        std::fs::create_dir_all(&directory).with_context(|| {
            format!(
                "cannot create {}; choose a writable output directory",
                directory.display()
            )
        })?;
        let path = directory.join(file.name);
        std::fs::write(&path, &file.contents)
            .with_context(|| format!("cannot write {}; choose a writable output directory", path.display()))?;
    }
    Ok(format!("wrote under {}:\n  {}", root.display(), summaries.join("\n  ")))
}

fn main() -> anyhow::Result<()> {
    let mut arguments = std::env::args_os().skip(1);
    let root = arguments
        .next()
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from("demo-data"));
    if arguments.next().is_some() {
        anyhow::bail!("mobilis-demo-gen takes one argument, the output directory (default demo-data)");
    }
    let summary = write_demo_data(&root)?;
    println!("{summary}");
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_physics::contacts::{classify_van_der_pauw, Configuration, ResistanceFamily};
    use mobilis_physics::van_der_pauw::sheet_resistance;

    fn committed_root() -> PathBuf {
        PathBuf::from(env!("CARGO_MANIFEST_DIR"))
    }

    /// A fresh directory under the system's temporary directory.
    fn scratch_directory(label: &str) -> PathBuf {
        let unique = format!(
            "mobilis-demo-{label}-{}-{}",
            std::process::id(),
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map(|d| d.as_nanos())
                .unwrap_or(0)
        );
        std::env::temp_dir().join(unique)
    }

    // The committed files must be exactly what the generator writes today, so that a change
    // of the physics cannot leave stale demo data behind. On failure, regenerate with
    // `cargo run -p mobilis-demo-data -- demo-data` and review the difference.
    #[test]
    fn committed_files_are_what_the_generator_writes() {
        let scratch = scratch_directory("regenerate");
        write_demo_data(&scratch).unwrap();
        let (files, _) = demo_files().unwrap();
        let written: Vec<String> = files
            .iter()
            .map(|file| format!("{}/{}", file.directory, file.name))
            .collect();
        // The list is spelled out so that a file the generator stops writing is noticed too.
        assert_eq!(
            written,
            [
                "si-wafer/readings.csv",
                "si-wafer/samples.csv",
                "si-wafer/truth.json",
                "heterostructure/sweeps.csv",
                "heterostructure/truth.json",
                "inas-film/sweeps.csv",
                "inas-film/truth.json",
                "heterostructure/sdh-sweeps.csv",
                "heterostructure/truth-sdh.json",
                "thin-film/wl-sweep.csv",
                "thin-film/truth.json",
            ]
        );
        for relative in &written {
            let fresh = std::fs::read(scratch.join(relative)).unwrap();
            let committed = std::fs::read(committed_root().join(relative))
                .unwrap_or_else(|error| panic!("cannot read the committed demo-data/{relative}: {error}"));
            assert!(
                fresh == committed,
                "demo-data/{relative} differs from what the generator writes; regenerate it with `cargo run -p mobilis-demo-data -- demo-data` from the repository root"
            );
        }
        std::fs::remove_dir_all(&scratch).unwrap();
    }

    #[test]
    fn readings_have_the_contract_header_and_a_full_set_per_temperature() {
        let generated = si_wafer::generate().unwrap();
        let csv = si_wafer::readings_csv(&generated.readings);
        assert!(csv.starts_with("sample,temperature_K,field_T,i_in,i_out,v_pos,v_neg,current_A,voltage_V\n"));
        // 2 pieces x 47 temperatures x (8 resistance + 8 Hall readings).
        assert_eq!(si_wafer::setpoints_k().len(), 47);
        assert_eq!(generated.readings.len(), 2 * 47 * 16);
        for reading in &generated.readings {
            let classified = classify_van_der_pauw(reading.i_in, reading.i_out, reading.v_pos, reading.v_neg).unwrap();
            assert_eq!(classified.configuration.is_hall(), reading.field_t != 0.0);
            assert!(reading.current_a.abs() >= 1e-9 && reading.current_a.abs() <= 1e-2);
            // At 20 K the frozen-out layer needs more than 10 mV even at the smallest current
            // (the Hall resistance is near 4e8 ohm); from 25 K on the current keeps |V| <= 10 mV
            // up to the noise and the thermoelectric offsets.
            let limit_v = if reading.temperature_k < 22.5 { 0.5 } else { 10.1e-3 };
            assert!(reading.voltage_v.abs() < limit_v, "{reading:?}");
        }
    }

    // A plain reduction of the generated readings (current-reversal and field-reversal
    // averages, van der Pauw relation, R_H = V_H / (I B)) lands on the invented truth within
    // the noise at every temperature: the data carry the physics they claim to.
    #[test]
    fn readings_reduce_to_the_invented_truth() {
        let generated = si_wafer::generate().unwrap();
        for (sample, temperature_k, layer) in &generated.layers {
            let mut resistance_sums = [0.0; 2];
            let mut hall_sum = 0.0;
            for reading in generated
                .readings
                .iter()
                .filter(|r| &r.sample == sample && r.temperature_k == *temperature_k)
            {
                let c = classify_van_der_pauw(reading.i_in, reading.i_out, reading.v_pos, reading.v_neg).unwrap();
                let ratio = (c.voltage_sign * reading.voltage_v) / (c.current_sign * reading.current_a);
                match c.configuration {
                    Configuration::Resistance { family, .. } => {
                        resistance_sums[usize::from(family == ResistanceFamily::B)] += ratio / 4.0;
                    }
                    _ => hall_sum += reading.field_t.signum() * ratio / 8.0,
                }
            }
            let sheet = sheet_resistance(resistance_sums[0], resistance_sums[1]).unwrap();
            let sheet_hall = hall_sum / 0.5;
            assert!(
                (sheet / layer.sheet_resistance_ohm_sq - 1.0).abs() < 2e-3,
                "{sample} {temperature_k} K: R_s {sheet} vs {}",
                layer.sheet_resistance_ohm_sq
            );
            assert!(
                (sheet_hall / layer.sheet_hall_coefficient_m2_per_c - 1.0).abs() < 2e-3,
                "{sample} {temperature_k} K: R_Hs {sheet_hall} vs {}",
                layer.sheet_hall_coefficient_m2_per_c
            );
        }
    }
}
