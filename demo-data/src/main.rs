//! `mobilis-demo-gen`: writes the invented demo scenario of mobilis.
//!
//! Usage: `mobilis-demo-gen [DIR]` (default `demo-data`). It writes, always the same bytes
//! for the same program (fixed seed, rounded numbers):
//!
//! - `DIR/si-wafer/readings.csv`: raw van der Pauw readings, the `readings` role of
//!   `hall.reduce`;
//! - `DIR/si-wafer/samples.csv`: thickness and Hall factor per piece, the `samples` role;
//! - `DIR/si-wafer/truth.json`: the invented true parameters the readings were made from.
//!
//! The data are made up; see `README.md` next to this crate. The physics is
//! `mobilis_core::forward`, the same models the plugins fit.

mod format;
mod si_wafer;

use anyhow::Context as _;
use std::path::{Path, PathBuf};

/// Generates the scenario and writes its files under `root`; returns the one-line summary.
fn write_demo_data(root: &Path) -> anyhow::Result<String> {
    let generated = si_wafer::generate()?;
    let directory = root.join("si-wafer");
    std::fs::create_dir_all(&directory).with_context(|| {
        format!(
            "cannot create {}; choose a writable output directory",
            directory.display()
        )
    })?;
    let files = [
        ("readings.csv", si_wafer::readings_csv(&generated.readings)),
        ("samples.csv", si_wafer::samples_csv(&generated.sample_rows)),
        ("truth.json", generated.truth.to_pretty_string()),
    ];
    for (name, contents) in files {
        let path = directory.join(name);
        std::fs::write(&path, contents)
            .with_context(|| format!("cannot write {}; choose a writable output directory", path.display()))?;
    }
    Ok(format!(
        "wrote {} readings of {} samples at {} temperatures to {}",
        generated.readings.len(),
        generated.sample_rows.len(),
        generated.temperature_count,
        directory.display()
    ))
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
    use mobilis_core::contacts::{classify_van_der_pauw, Configuration, ResistanceFamily};
    use mobilis_core::van_der_pauw::sheet_resistance;

    fn committed_directory() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join("si-wafer")
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
        for name in ["readings.csv", "samples.csv", "truth.json"] {
            let fresh = std::fs::read(scratch.join("si-wafer").join(name)).unwrap();
            let committed = std::fs::read(committed_directory().join(name))
                .unwrap_or_else(|error| panic!("cannot read the committed demo-data/si-wafer/{name}: {error}"));
            assert!(
                fresh == committed,
                "demo-data/si-wafer/{name} differs from what the generator writes; regenerate it with `cargo run -p mobilis-demo-data -- demo-data` from the repository root"
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
