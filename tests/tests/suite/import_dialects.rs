//! A lab's own file imported as it is: a two-wafer van der Pauw run exported by an invented
//! station, with its own header (`Sample ID, T (C), B (G), I+, I-, V+, V-, I (mA), V (mV)`),
//! a `#` preamble, and in a second export `;` separators and decimal commas. One `mobilis
//! import NAME PATH --recipe station.toml` call (the real CLI binary against a real
//! `mobilisd`) imports each file unedited, and `hall.reduce` recovers the sheet density and
//! mobility the readings were generated from, within the uncertainties it states. Files
//! that do not match their recipe get errors naming the line and the option to change, and
//! the provenance identifies the file by its SHA-256, size and modification time.
//!
//! Unusual files a new user brought: a sample sheet whose `thickness_m` column is empty (2D
//! samples only) imports as numbers that `hall.reduce` takes, and so does a 2D result
//! exported and imported again; a voltage column with `n/a`, `--` and `1.2e-3V` in it is
//! noted with the cells' lines; a commented, `;`-separated export with decimal commas gets
//! the help that reads it, and a wrong skip_rows is refused instead of losing the header.

use mobilis_physics::readings::RawReading;
use mobilis_tests::{
    float_column, readings_json_columns, run_cli, string_column, van_der_pauw_run, InventedSample, TestDaemon,
};
use serde_json::json;
use std::path::Path;

const ELEMENTARY_CHARGE: f64 = mobilis_physics::constants::ELEMENTARY_CHARGE_C;

/// The invented wafers: (name, sheet resistance ohm/sq, R_B/R_A, sheet Hall coefficient m^2/C).
const WAFERS: [InventedSample; 2] = [("W1", 180.0, 1.2, -450.0), ("W2", 2600.0, 0.9, 1900.0)];
const TEMPERATURES_K: [f64; 2] = [250.0, 300.0];
const HEADER: [&str; 9] = [
    "Sample ID",
    "T (C)",
    "B (G)",
    "I+",
    "I-",
    "V+",
    "V-",
    "I (mA)",
    "V (mV)",
];

fn generate_readings() -> Vec<RawReading> {
    van_der_pauw_run(
        &WAFERS,
        &TEMPERATURES_K,
        [15e-6, -10e-6, 5e-6, 20e-6, -8e-6, 12e-6],
        0.01,
        20261202,
    )
}

/// The station's export: a `#` preamble, then its header and rows in its units (degC, G,
/// mA, mV). With `semicolons`, fields are separated by `;` and numbers carry decimal commas.
fn station_export(readings: &[RawReading], semicolons: bool) -> String {
    let separator = if semicolons { "; " } else { ", " };
    let number = |value: f64| {
        let text = format!("{value:.9e}");
        if semicolons {
            text.replace('.', ",")
        } else {
            text
        }
    };
    let mut text =
        String::from("# Hall station export, invented lab\n# operator: night shift\n# wafers W1 W2, 100 uA\n");
    text += &HEADER.join(separator);
    text.push('\n');
    for r in readings {
        let fields = [
            r.sample.clone(),
            number(r.temperature_k - 273.15),
            number(r.field_t * 1e4),
            r.i_in.to_string(),
            r.i_out.to_string(),
            r.v_pos.to_string(),
            r.v_neg.to_string(),
            number(r.current_a * 1e3),
            number(r.voltage_v * 1e3),
        ];
        text += &fields.join(separator);
        text.push('\n');
    }
    text
}

/// The station's recipe: its names and units, and for the second export its dialect.
fn recipe(semicolons: bool) -> String {
    let csv = if semicolons {
        r##"csv = { separator = ";", decimal_comma = true, comment_prefix = "#" }"##
    } else {
        r##"csv = { comment_prefix = "#" }"##
    };
    format!(
        r#"# The invented station's export layout.
format = "csv"
{csv}

[rename]
"Sample ID" = "sample"
"T (C)" = "temperature"
"B (G)" = "field"
"I+" = "i_in"
"I-" = "i_out"
"V+" = "v_pos"
"V-" = "v_neg"
"I (mA)" = "current"
"V (mV)" = "voltage"

[units]
temperature = "degC"
field = "G"
current = "mA"
voltage = "mV"
"#
    )
}

/// Runs the CLI; returns (success, stdout, stderr).
fn mobilis(url: &str, arguments: &[&str]) -> (bool, String, String) {
    let run = run_cli(url, "never", arguments);
    (run.success, run.stdout, run.stderr)
}

fn write(directory: &Path, name: &str, text: &str) -> String {
    let path = directory.join(name);
    std::fs::write(&path, text).expect("write a test file");
    path.display().to_string()
}

/// Reduces an imported run and checks it against the wafers it was generated from.
async fn check_reduction(daemon: &TestDaemon, readings: &str, output: &str) {
    let run = daemon
        .call(
            "analysis.run",
            json!({"analysis": "hall.reduce", "inputs": {"readings": readings}, "output": output, "group_by": ["sample"]}),
        )
        .await;
    assert_eq!(run["rows"], WAFERS.len() * TEMPERATURES_K.len(), "{run}");
    let page = daemon.call("dataset.rows", json!({"name": output})).await;
    let samples = string_column(&page, "sample");
    let temperatures = float_column(&page, "temperature_K");
    let density = float_column(&page, "sheet_density_m2");
    let density_unc = float_column(&page, "sheet_density_m2_unc");
    let mobility = float_column(&page, "hall_mobility_m2_per_Vs");
    let mobility_unc = float_column(&page, "hall_mobility_m2_per_Vs_unc");
    let carrier = string_column(&page, "carrier_type");
    for row in 0..samples.len() {
        let name = samples[row].as_deref().unwrap();
        let (_, sheet, _, hall) = WAFERS.iter().find(|w| w.0 == name).copied().unwrap();
        assert!(
            TEMPERATURES_K
                .iter()
                .any(|t| (t - temperatures[row].unwrap()).abs() < 1e-6),
            "{name}: T {:?}",
            temperatures[row]
        );
        let true_density = 1.0 / (ELEMENTARY_CHARGE * hall.abs());
        let true_mobility = hall.abs() / sheet;
        let (n, n_unc) = (density[row].unwrap(), density_unc[row].unwrap());
        let (mu, mu_unc) = (mobility[row].unwrap(), mobility_unc[row].unwrap());
        // Within the stated (one sigma) uncertainty at a coverage factor of 3, and the
        // uncertainty is a real one: positive and below a percent here.
        assert!(n_unc > 0.0 && n_unc < 0.01 * n, "{name}: n_s {n} +- {n_unc}");
        assert!(
            (n - true_density).abs() <= 3.0 * n_unc,
            "{name}: n_s {n} +- {n_unc}, true {true_density}"
        );
        assert!(mu_unc > 0.0 && mu_unc < 0.01 * mu, "{name}: mu {mu} +- {mu_unc}");
        assert!(
            (mu - true_mobility).abs() <= 3.0 * mu_unc,
            "{name}: mu {mu} +- {mu_unc}, true {true_mobility}"
        );
        assert_eq!(carrier[row].as_deref(), Some(if hall > 0.0 { "p" } else { "n" }));
    }
}

#[tokio::test(flavor = "multi_thread")]
async fn a_stations_own_exports_import_unedited_with_one_recipe_and_reduce_to_the_truth() {
    let daemon = TestDaemon::start().await;
    let url = daemon.daemon.url().to_owned();
    let readings = generate_readings();
    let data = daemon.data.clone();

    // The comma export with its preamble.
    let export = write(&data, "station-run.csv", &station_export(&readings, false));
    let station = write(&data, "station.toml", &recipe(false));
    let (ok, stdout, stderr) = mobilis(&url, &["import", "station-run", &export, "--recipe", &station]);
    assert!(ok, "import failed:\n{stdout}\n{stderr}");
    assert!(stdout.contains(&format!("({} rows)", readings.len())), "{stdout}");
    check_reduction(&daemon, "station-run", "station-hall").await;

    // The provenance names the file as it is, by checksum, size and modification time.
    let info = daemon.call("dataset.info", json!({"name": "station-run"})).await;
    let provenance = &info["provenance"];
    let bytes = std::fs::read(&export).unwrap();
    let modified = std::fs::metadata(&export).unwrap().modified().unwrap();
    assert_eq!(provenance["sha256"], sha256_hex(&bytes), "{provenance}");
    assert_eq!(provenance["size_bytes"], bytes.len(), "{provenance}");
    assert_eq!(
        provenance["modified"],
        mobilis_rpc::store::utc_timestamp(modified),
        "{provenance}"
    );
    assert_eq!(provenance["rename"]["Sample ID"], "sample");
    assert_eq!(provenance["csv"]["comment_prefix"], "#");
    // And the report page's provenance line shows them.
    let page = daemon.call("report.render", json!({"sample": "W1"})).await;
    let html = page["html"].as_str().unwrap();
    assert!(
        html.contains(&sha256_hex(&bytes)),
        "the report names the file's SHA-256"
    );
    assert!(
        html.contains(&format!("{} bytes", bytes.len())),
        "the report names the file's size"
    );

    // The semicolon export with decimal commas, through its own recipe.
    let export_eu = write(&data, "station-run-eu.csv", &station_export(&readings, true));
    assert!(
        std::fs::read_to_string(&export_eu).unwrap().contains("; 2,68"),
        "decimal commas are written"
    );
    let station_eu = write(&data, "station-eu.toml", &recipe(true));
    let (ok, stdout, stderr) = mobilis(&url, &["import", "station-run-eu", &export_eu, "--recipe", &station_eu]);
    assert!(ok, "import failed:\n{stdout}\n{stderr}");
    check_reduction(&daemon, "station-run-eu", "station-hall-eu").await;

    // Flags beside the recipe win over it: the comma recipe with --separator and
    // --decimal-comma reads the semicolon export too.
    let (ok, stdout, stderr) = mobilis(
        &url,
        &[
            "import",
            "station-run-flags",
            &export_eu,
            "--recipe",
            &station,
            "--separator",
            ";",
            "--decimal-comma",
        ],
    );
    assert!(ok, "import failed:\n{stdout}\n{stderr}");

    // A semicolon file read without --decimal-comma imports, with a note naming the cells.
    let (ok, stdout, stderr) = mobilis(
        &url,
        &[
            "import",
            "station-run-text",
            &export_eu,
            "--comment-prefix",
            "#",
            "--separator",
            ";",
        ],
    );
    assert!(ok, "import failed:\n{stdout}\n{stderr}");
    assert!(
        stdout.contains(
            "note: columns `T (C)`, `B (G)`, `I (mA)`, `V (mV)` hold text such as `-2,315000000e1` at line 5, column 2: numbers with a decimal comma?"
        ),
        "{stdout}"
    );
    assert!(stdout.contains("--decimal-comma"), "{stdout}");

    // The comma recipe alone on the semicolon export: the separator is named.
    let (ok, _, stderr) = mobilis(&url, &["import", "wrong-separator", &export_eu, "--recipe", &station]);
    assert!(!ok);
    assert!(stderr.contains("line 4: the header is one field"), "{stderr}");
    assert!(stderr.contains("--separator ';'"), "{stderr}");

    // Without the recipe the preamble is explained, not passed to the parser.
    let (ok, _, stderr) = mobilis(&url, &["import", "no-recipe", &export]);
    assert!(!ok);
    assert!(stderr.contains("line 1 has 2 fields"), "{stderr}");
    assert!(
        stderr.contains("--comment-prefix '#'") && stderr.contains("--skip-rows 3"),
        "{stderr}"
    );
    assert!(!stderr.contains("truncate_ragged_lines"), "{stderr}");

    // A ragged row: an error naming its line, never rows padded with nulls.
    let mut ragged: Vec<String> = station_export(&readings, false).lines().map(str::to_owned).collect();
    let cut = ragged[16].rsplitn(3, ", ").nth(2).unwrap().to_owned();
    ragged[16] = cut;
    let ragged_file = write(&data, "ragged.csv", &(ragged.join("\n") + "\n"));
    let (ok, _, stderr) = mobilis(&url, &["import", "ragged", &ragged_file, "--recipe", &station]);
    assert!(!ok);
    assert!(
        stderr.contains("line 17 has 7 fields, the header (line 4) has 9"),
        "{stderr}"
    );
    assert!(!stderr.contains("truncate_ragged_lines"), "{stderr}");

    // A text cell in a column given a unit is located in the file.
    let mut bad_cell: Vec<String> = station_export(&readings, false).lines().map(str::to_owned).collect();
    let mut fields: Vec<String> = bad_cell[9].split(", ").map(str::to_owned).collect();
    fields[1] = "warming".into();
    bad_cell[9] = fields.join(", ");
    let bad_file = write(&data, "bad-cell.csv", &(bad_cell.join("\n") + "\n"));
    let (ok, _, stderr) = mobilis(&url, &["import", "bad-cell", &bad_file, "--recipe", &station]);
    assert!(!ok);
    assert!(
        stderr.contains("line 10, column 2 (`temperature`): `warming` is not a number"),
        "{stderr}"
    );

    // The station's newer export writes the configuration in pair notation ("21,34")
    // instead of four contact columns; flags alone, without a recipe, read it.
    let mut notation = String::from("# Hall station export, contacts in pair notation\n");
    notation += "Sample ID, T (C), B (G), Config, I (mA), V (mV)\n";
    for r in &readings {
        notation += &format!(
            "{}, {:.9e}, {:.9e}, \"{}{},{}{}\", {:.9e}, {:.9e}\n",
            r.sample,
            r.temperature_k - 273.15,
            r.field_t * 1e4,
            r.i_in,
            r.i_out,
            r.v_pos,
            r.v_neg,
            r.current_a * 1e3,
            r.voltage_v * 1e3
        );
    }
    let notation_file = write(&data, "station-run-config.csv", &notation);
    let (ok, stdout, stderr) = mobilis(
        &url,
        &[
            "import",
            "station-run-config",
            &notation_file,
            "--comment-prefix",
            "#",
            "--rename",
            "Sample ID=sample",
            "--rename",
            "T (C)=temperature",
            "--rename",
            "B (G)=field",
            "--rename",
            "Config=contacts",
            "--rename",
            "I (mA)=current",
            "--rename",
            "V (mV)=voltage",
            "--unit",
            "temperature=degC",
            "--unit",
            "field=G",
            "--unit",
            "current=mA",
            "--unit",
            "voltage=mV",
        ],
    );
    assert!(ok, "import failed:\n{stdout}\n{stderr}");
    check_reduction(&daemon, "station-run-config", "station-hall-config").await;

    // None of the failed imports stored anything.
    let list = daemon.call("dataset.list", json!({})).await;
    let names: Vec<&str> = list["datasets"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|d| d["name"].as_str())
        .collect();
    for failed in ["wrong-separator", "no-recipe", "ragged", "bad-cell"] {
        assert!(!names.contains(&failed), "{failed} stored: {names:?}");
    }
}

#[tokio::test(flavor = "multi_thread")]
async fn a_pipeline_files_imports_take_the_recipe_keys() {
    let daemon = TestDaemon::start().await;
    let url = daemon.daemon.url().to_owned();
    let readings = generate_readings();
    let data = daemon.data.clone();
    write(&data, "station-run-eu.csv", &station_export(&readings, true));
    write(&data, "station.toml", &recipe(false));
    // The comma recipe by reference, with the dialect of this export beside it.
    let pipeline = write(
        &data,
        "pipeline.toml",
        r#"
[[import]]
name = "run"
path = "station-run-eu.csv"
recipe = "station.toml"
csv = { separator = ";", decimal_comma = true }

[[step]]
analysis = "hall.reduce"
inputs = { readings = "run" }
output = "run-hall"
group_by = ["sample"]
"#,
    );
    let (ok, stdout, stderr) = mobilis(&url, &["pipeline", &pipeline]);
    assert!(ok, "pipeline failed:\n{stdout}\n{stderr}");
    check_reduction(&daemon, "run", "run-hall-again").await;
}

/// The dtypes of a dataset's columns, by name.
async fn dtypes(daemon: &TestDaemon, name: &str) -> std::collections::BTreeMap<String, String> {
    let info = daemon.call("dataset.info", json!({"name": name})).await;
    info["columns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            (
                c["name"].as_str().unwrap().to_owned(),
                c["dtype"].as_str().unwrap().to_owned(),
            )
        })
        .collect()
}

/// The notes of an import's answer.
fn notes(answer: &serde_json::Value) -> Vec<String> {
    answer["notes"]
        .as_array()
        .map(|notes| notes.iter().map(|n| n.as_str().unwrap().to_owned()).collect())
        .unwrap_or_default()
}

#[tokio::test(flavor = "multi_thread")]
async fn a_sheet_of_2d_samples_with_an_empty_thickness_imports_as_numbers_and_reduces() {
    let daemon = TestDaemon::start().await;
    let readings = generate_readings();
    daemon
        .call(
            "dataset.import",
            json!({"name": "run", "columns": readings_json_columns(&readings)}),
        )
        .await;
    // Null thickness means a 2D sheet: a sheet of only 2D samples has an empty column.
    std::fs::write(
        daemon.data.join("sheet.csv"),
        "sample,thickness_m,hall_factor\nW1,,1.0\nW2,,1.0\n",
    )
    .unwrap();
    let imported = daemon
        .call("dataset.import", json!({"name": "sheet", "path": "sheet.csv"}))
        .await;
    assert_eq!(dtypes(&daemon, "sheet").await["thickness_m"], "f64");
    assert!(
        notes(&imported)
            .iter()
            .any(|n| n.contains("column `thickness_m` has no value in any row") && n.contains("Float64")),
        "{imported}"
    );
    let run = daemon
        .call(
            "analysis.run",
            json!({"analysis": "hall.reduce", "inputs": {"readings": "run", "samples": "sheet"},
                   "output": "sheet-hall", "group_by": ["sample"]}),
        )
        .await;
    assert_eq!(run["rows"], WAFERS.len() * TEMPERATURES_K.len(), "{run}");
    // The 2D reduction is the one without a sheet: the same sheet densities.
    check_reduction(&daemon, "run", "plain-hall").await;
    let with_sheet = daemon.call("dataset.rows", json!({"name": "sheet-hall"})).await;
    let without = daemon.call("dataset.rows", json!({"name": "plain-hall"})).await;
    assert_eq!(
        float_column(&with_sheet, "sheet_density_m2"),
        float_column(&without, "sheet_density_m2")
    );

    // A 2D result exported to CSV reads back with its empty columns as numbers.
    daemon
        .call(
            "dataset.export",
            json!({"name": "sheet-hall", "path": "sheet-hall.csv"}),
        )
        .await;
    daemon
        .call(
            "dataset.import",
            json!({"name": "sheet-hall-again", "path": "sheet-hall.csv"}),
        )
        .await;
    let stored = dtypes(&daemon, "sheet-hall").await;
    let again = dtypes(&daemon, "sheet-hall-again").await;
    let page = daemon.call("dataset.rows", json!({"name": "sheet-hall"})).await;
    let mut empty_floats = 0;
    for (name, dtype) in &stored {
        if dtype == "f64" && float_column(&page, name).iter().all(Option::is_none) {
            empty_floats += 1;
            assert_eq!(again[name], "f64", "{name}: {again:?}");
        }
    }
    assert!(empty_floats > 0, "a 2D result has columns without values: {stored:?}");
}

#[tokio::test(flavor = "multi_thread")]
async fn cells_that_are_not_numbers_in_a_numeric_column_are_noted_with_their_lines() {
    let daemon = TestDaemon::start().await;
    let mut text = String::from("sample,temperature_K,voltage_V\n");
    let cells = [
        "1.5e-3", "n/a", "1.6e-3", "--", "1.2e-3V", "1.7e-3", "1.8e-3", "NA", "1.9e-3", "2.0e-3",
    ];
    for (row, cell) in cells.iter().enumerate() {
        text += &format!("W1,{},{cell}\n", 250 + row);
    }
    std::fs::write(daemon.data.join("junk.csv"), text).unwrap();
    let imported = daemon
        .call("dataset.import", json!({"name": "junk", "path": "junk.csv"}))
        .await;
    // Nothing is changed: the column is text, as the file writes it, and the note says why.
    assert_eq!(dtypes(&daemon, "junk").await["voltage_V"], "str");
    let notes = notes(&imported);
    assert_eq!(notes.len(), 1, "{notes:?}");
    for words in [
        "column `voltage_V` was imported as text: 4 of its 10 non-empty cells are not numbers",
        "`n/a` on line 3, `--` on line 5, `1.2e-3V` on line 6, ...",
        "lines of the file, counted from 1",
        "csv.null_values [\"n/a\",\"--\",\"NA\"]",
        "correct the other cells that are not numbers in the file",
    ] {
        assert!(notes[0].contains(words), "`{words}` missing: {}", notes[0]);
    }
    // Following the note: the marks are missing values; the cell with a unit still is text.
    let imported = daemon
        .call(
            "dataset.import",
            json!({"name": "junk", "path": "junk.csv", "overwrite": true,
                   "csv": {"null_values": ["n/a", "--", "NA"]}}),
        )
        .await;
    assert_eq!(dtypes(&daemon, "junk").await["voltage_V"], "str");
    let left = self::notes(&imported);
    assert!(
        left.len() == 1 && left[0].contains("1 of its 7 non-empty cells is not a number (`1.2e-3V` on line 6;"),
        "{left:?}"
    );
    let info = daemon.call("dataset.info", json!({"name": "junk"})).await;
    assert_eq!(info["provenance"]["csv"]["null_values"], json!(["n/a", "--", "NA"]));
    // Empty cells, as the note advises, are missing values of a numeric column.
    let cleaned: String = std::fs::read_to_string(daemon.data.join("junk.csv"))
        .unwrap()
        .lines()
        .map(|line| {
            let mut fields: Vec<&str> = line.split(',').collect();
            if fields[2].parse::<f64>().is_err() && fields[2] != "voltage_V" {
                fields[2] = "";
            }
            fields.join(",") + "\n"
        })
        .collect();
    std::fs::write(daemon.data.join("cleaned.csv"), cleaned).unwrap();
    let imported = daemon
        .call("dataset.import", json!({"name": "cleaned", "path": "cleaned.csv"}))
        .await;
    assert_eq!(dtypes(&daemon, "cleaned").await["voltage_V"], "f64");
    assert!(imported.get("notes").is_none(), "{imported}");
    let page = daemon.call("dataset.rows", json!({"name": "cleaned"})).await;
    assert_eq!(
        float_column(&page, "voltage_V").iter().filter(|v| v.is_none()).count(),
        4
    );
}

/// A lab's export that comments its preamble, separates by `;` and writes decimal commas.
fn commented_semicolon_export() -> String {
    let mut text = String::from("# run 12, cryostat B\n# operator notes\nsample;T;B;I;V;R\n");
    for row in 0..15 {
        text += &format!(
            "S{};{},85;0,{};1,3;4,{};{}\n",
            row % 3 + 1,
            26 + row,
            row % 10,
            row % 10,
            100 + row
        );
    }
    text
}

/// The error's message and help of a call that must fail.
async fn refusal(daemon: &TestDaemon, params: serde_json::Value) -> (i32, String, String) {
    match daemon.client.call("dataset.import", params).await {
        Ok(answer) => panic!("the import succeeded: {answer}"),
        Err(error) => {
            let help = error.data().and_then(|data| data.help).unwrap_or_default();
            let mobilis_client::ClientError::Rpc { code, message, .. } = error else {
                panic!("not a JSON-RPC error: {error}");
            };
            (code, message, help)
        }
    }
}

#[tokio::test(flavor = "multi_thread")]
async fn the_help_for_a_commented_semicolon_export_reads_it_and_a_wrong_skip_is_refused() {
    let daemon = TestDaemon::start().await;
    std::fs::write(daemon.data.join("run12.csv"), commented_semicolon_export()).unwrap();

    // No dialect: the help names every option at once, with the right count of lines.
    let (code, message, help) = refusal(&daemon, json!({"name": "run12", "path": "run12.csv"})).await;
    assert_eq!(code, 4008, "{message}");
    assert!(
        message.contains("begin on line 3 (`sample;T;B;I;V;R`)") && message.contains("separated by `;`, not `,`"),
        "{message}"
    );
    assert!(
        help.contains("csv.separator \";\", csv.comment_prefix \"#\", csv.decimal_comma true")
            && help.contains("--separator ';' --comment-prefix '#' --decimal-comma")
            && help.contains("csv.skip_rows 2"),
        "{help}"
    );
    assert!(!help.contains("skip_rows 3"), "{help}");

    // Skipping one line too many would make the first data row the header: refused.
    for separator in [",", ";"] {
        let (code, message, help) = refusal(
            &daemon,
            json!({"name": "run12", "path": "run12.csv", "csv": {"skip_rows": 3, "separator": separator}}),
        )
        .await;
        assert_eq!(code, 4008, "{message}");
        assert!(
            message.contains("line 4: the header, `S1;26,85;0,0;1,3;4,0;100`, looks like a row of data"),
            "{message}"
        );
        assert!(
            help.contains("its header is line 3") && help.contains("--separator ';' --skip-rows 2 --decimal-comma"),
            "{help}"
        );
    }

    // Following the help reads the whole table, both ways it offers.
    for csv in [
        json!({"separator": ";", "comment_prefix": "#", "decimal_comma": true}),
        json!({"separator": ";", "skip_rows": 2, "decimal_comma": true}),
    ] {
        let imported = daemon
            .call(
                "dataset.import",
                json!({"name": "run12", "path": "run12.csv", "csv": csv, "overwrite": true}),
            )
            .await;
        assert_eq!(imported["rows"], 15, "{imported}");
        let names: Vec<&str> = imported["columns"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["name"].as_str().unwrap())
            .collect();
        assert_eq!(names, ["sample", "T", "B", "I", "V", "R"]);
        let page = daemon.call("dataset.rows", json!({"name": "run12"})).await;
        assert_eq!(float_column(&page, "T")[0], Some(26.85));
        assert!(imported.get("notes").is_none(), "{imported}");
    }
}

fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::{Digest, Sha256};
    Sha256::digest(bytes).iter().map(|b| format!("{b:02x}")).collect()
}
