//! `mobilis`: the command-line client of the mobilis daemon.
//!
//! Every command except `serve` and `demo` talks to a running daemon (`--url`, default
//! `http://127.0.0.1:8470`, or `$MOBILIS_URL`). `demo` starts its own daemon on a free port
//! with a temporary workspace and runs the demo pipeline through it.

mod cli_errors;
mod demo;
mod describe;
mod import_recipe;
mod pipeline_file;
mod progress_bar;
mod report_files;
mod summary;
mod table;

use anyhow::{bail, Context};
use clap::{Parser, Subcommand};
use mobilis_client::Client;
use mobilis_protocol::method;
use mobilis_protocol::params::{
    AnalysisName, ExportParams, FilterValue, GroupBy, ImportParams, ListParams, NoParams, PlotParams, RowsParams,
    RunParams, TableFormat,
};
use progress_bar::{ProgressBar, ProgressMode};
use serde_json::Value;
use std::path::{Path, PathBuf};

/// Command-line client of the mobilis analysis daemon.
#[derive(Parser, Debug)]
#[command(name = "mobilis", version)]
struct Cli {
    /// Address of the daemon every command except serve and demo talks to.
    #[arg(
        long,
        global = true,
        env = "MOBILIS_URL",
        default_value = "http://127.0.0.1:8470",
        help_heading = "Global options (any command)"
    )]
    url: String,
    /// Bearer token, for a daemon started with --token (sent as Authorization: Bearer).
    #[arg(
        long,
        global = true,
        env = "MOBILIS_TOKEN",
        hide_env_values = true,
        help_heading = "Global options (any command)"
    )]
    token: Option<String>,
    /// When to draw a progress bar on stderr for run, pipeline and demo: auto draws it when
    /// stderr is a terminal, never and always as they say.
    #[arg(
        long,
        global = true,
        value_enum,
        default_value = "auto",
        help_heading = "Global options (any command)"
    )]
    progress: ProgressMode,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Run the daemon in the foreground (arguments after -- go to mobilisd).
    Serve {
        /// Options for mobilisd, e.g. -- --workspace lab --data-root /data (see mobilisd --help).
        #[arg(trailing_var_arg = true, allow_hyphen_values = true)]
        arguments: Vec<String>,
    },
    /// Show the daemon's version, plugins and workspace.
    Info,
    /// List the analyses the loaded plugins offer.
    Analyses,
    /// Show an analysis's input roles with their columns, and each parameter with its unit,
    /// default, allowed values and meaning.
    Describe {
        /// The analysis, e.g. hall.reduce (see `mobilis analyses`).
        analysis: String,
    },
    /// Import a CSV, Parquet or Arrow IPC file (a path on the daemon's machine), as the lab
    /// wrote it: --recipe, or the flags, describe its dialect, names and units.
    Import {
        /// Name to store the dataset under.
        name: String,
        /// The file to read, on the daemon's machine inside its data roots.
        path: PathBuf,
        #[command(flatten)]
        layout: import_recipe::ImportFlags,
        /// Replace a stored dataset of the same name (refused otherwise).
        #[arg(long)]
        overwrite: bool,
    },
    /// Run one analysis.
    Run {
        /// The analysis, e.g. hall.reduce (see `mobilis analyses`).
        analysis: String,
        /// ROLE=DATASET: the stored dataset for one input role, e.g. readings=run17 (repeatable;
        /// `mobilis describe ANALYSIS` lists the roles).
        #[arg(long = "input", value_name = "ROLE=DATASET", value_parser = parse_key_value, required = true)]
        inputs: Vec<(String, String)>,
        /// Name of the output dataset.
        #[arg(long)]
        output: String,
        /// Parameters as a JSON object in SI units, e.g. '{"material": "Si"}' (`mobilis describe
        /// ANALYSIS` lists them with their units and defaults).
        #[arg(long, default_value = "{}")]
        params: String,
        /// Run once per group of rows of the first input that share this column's value
        /// (repeatable: sample, temperature_K); the outputs are stacked, one summary per group.
        #[arg(long = "group-by", value_name = "COLUMN")]
        group_by: Vec<String>,
        /// Group a numeric --group-by column by clusters of its values instead of exact values:
        /// sorted values no further apart than TOLERANCE share a group (repeatable;
        /// temperature_K=0.5 keeps a logged temperature in one group per setpoint).
        #[arg(long = "group-tolerance", value_name = "COLUMN=TOLERANCE", value_parser = parse_group_tolerance)]
        group_tolerance: Vec<(String, f64)>,
        /// Replace a stored output dataset of the same name (refused otherwise).
        #[arg(long)]
        overwrite: bool,
        /// Also store the summary (the fitted values) as a dataset of this name: one row per
        /// group, one column per value, in SI.
        #[arg(long = "summary-output", value_name = "NAME")]
        summary_output: Option<String>,
        /// Stop the run after this many seconds (the daemon's default is 600; at most 86400),
        /// for example --deadline 3600 for a long fit.
        #[arg(long, value_name = "SECONDS")]
        deadline: Option<f64>,
    },
    /// Run a pipeline file (TOML: [[import]] and [[step]] tables; demo-data/pipeline.toml is an example).
    Pipeline {
        /// The pipeline file; its import paths are relative to it.
        file: PathBuf,
    },
    /// Show a dataset in the customary units of the trade (cm^-3, cm^2/(V s), ohm cm).
    Show {
        /// The dataset to show.
        name: String,
        /// First row to show (0 is the first).
        #[arg(long, default_value_t = 0)]
        offset: usize,
        /// How many rows to show.
        #[arg(long, default_value_t = 50)]
        limit: usize,
        /// Only these columns (repeatable).
        #[arg(long = "column")]
        columns: Vec<String>,
        /// Keep SI units.
        #[arg(long)]
        si: bool,
    },
    /// List the stored datasets (every page of dataset.list, in name order).
    Datasets {
        /// Only datasets whose name starts with this text.
        #[arg(long)]
        prefix: Option<String>,
    },
    /// Write a dataset to a file (a path on the daemon's machine).
    Export {
        /// The dataset to write.
        name: String,
        /// The file to write, on the daemon's machine inside its data roots.
        path: PathBuf,
        /// csv, parquet or ipc; default: from the file's extension.
        #[arg(long)]
        format: Option<String>,
        /// si writes the stored SI values; customary writes densities in cm^-3 and cm^-2,
        /// mobilities in cm^2/(V s), resistivities in ohm cm and lengths in um, with column
        /// names saying so (density_cm3), as a spreadsheet user expects.
        #[arg(long, value_enum, default_value = "si")]
        units: ExportUnits,
        /// Replace an existing file at PATH (refused otherwise).
        #[arg(long)]
        overwrite: bool,
    },
    /// Call any method with JSON parameters and print the JSON result.
    Call {
        /// The JSON-RPC method, e.g. dataset.info (`mobilis call rpc.discover` lists them all).
        method: String,
        /// The method's parameters as a JSON object.
        #[arg(default_value = "{}")]
        params: String,
    },
    /// Draw a dataset: an SVG file, and with --vega-lite the same figure as a Vega-Lite specification.
    Plot {
        /// The dataset to draw (see `mobilis datasets`).
        dataset: String,
        /// Figure kind (see `mobilis plot --list`); default: the one that suits the analysis that made the dataset.
        #[arg(long)]
        kind: Option<String>,
        /// Keep only rows where column=value (repeatable), e.g. --where sample=W1; temperature_K
        /// and field_T match their nominal value (--where field_T=0.5 keeps 0.4997 T). The
        /// figure's title names the rows kept.
        #[arg(long = "where", value_parser = parse_key_value)]
        filter: Vec<(String, String)>,
        /// x column, for kind `columns`.
        #[arg(long)]
        x: Option<String>,
        /// y column (repeatable), for kind `columns`.
        #[arg(long)]
        y: Vec<String>,
        /// Column whose values make separate series (repeatable), e.g. --series-by sample
        /// --series-by field_T; temperatures and fields count by their nominal values
        /// (0.4997 T and 0.5002 T are one series "0.5 T"). Default: the figure kind's choice.
        #[arg(long = "series-by", value_name = "COLUMN")]
        series_by: Vec<String>,
        /// SVG file to write (default: <dataset>[-<kind>].svg).
        #[arg(long)]
        out: Option<PathBuf>,
        /// Also write the Vega-Lite specification to this file.
        #[arg(long = "vega-lite")]
        vega_lite: Option<PathBuf>,
        /// List the figure kinds (of this dataset) instead of drawing.
        #[arg(long)]
        list: bool,
    },
    /// Write one self-contained HTML report per sample (results summary, figures, tables, quality flags, provenance); --pdf also prints each to PDF.
    Report {
        /// Directory to write <sample>.html into.
        #[arg(long, default_value = "reports")]
        out: PathBuf,
        /// Only these samples (repeatable); default: every sample with data.
        #[arg(long)]
        sample: Vec<String>,
        /// Also print each page to <sample>.pdf with headless Chromium ($CHROMIUM, or chromium on the PATH); without it the HTML is written and a message says what to install.
        #[arg(long)]
        pdf: bool,
    },
    /// Run the demo: a real daemon, the plugins loaded dynamically, the invented demo data.
    Demo {
        /// The demo-data directory (default: the one in the source tree).
        #[arg(long)]
        data: Option<PathBuf>,
        /// Keep the daemon's workspace in this directory instead of a temporary one.
        #[arg(long)]
        workspace: Option<PathBuf>,
        /// Also write each demo sample's HTML report into this directory.
        #[arg(long)]
        reports: Option<PathBuf>,
    },
}

/// The units `mobilis export` writes.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
enum ExportUnits {
    Si,
    Customary,
}

fn parse_key_value(text: &str) -> Result<(String, String), String> {
    text.split_once('=')
        .map(|(k, v)| (k.trim().to_owned(), v.trim().to_owned()))
        .ok_or_else(|| format!("expected key=value, got `{text}`"))
}

fn parse_group_tolerance(text: &str) -> Result<(String, f64), String> {
    let (column, tolerance) = parse_key_value(text)?;
    let tolerance: f64 = tolerance
        .parse()
        .map_err(|_| format!("expected COLUMN=TOLERANCE with a number, got `{text}`"))?;
    Ok((column, tolerance))
}

/// The units `--unit COLUMN=UNIT` accepts, per quantity, as the unit table lists them.
fn accepted_units_help() -> String {
    use mobilis_physics::units::Quantity;
    let mut text = String::from(
        "Units accepted by `mobilis import --unit COLUMN=UNIT` (the column is converted into SI \
         and renamed after the SI unit, e.g. temperature_C=degC becomes temperature_K):\n",
    );
    for quantity in Quantity::ALL {
        let units = quantity.accepted_units();
        if !units.is_empty() {
            text.push_str(&format!("  {quantity}: {units}\n"));
        }
    }
    text.push_str("`mobilis show` and `mobilis export --units customary` give cm^-3, cm^2/(V s) and ohm cm.");
    text
}

/// Makes a local path absolute, so the daemon resolves it as the user meant.
fn absolute(path: &Path) -> anyhow::Result<String> {
    let path = if path.is_absolute() {
        path.to_owned()
    } else {
        std::env::current_dir()?.join(path)
    };
    Ok(path.display().to_string())
}

#[tokio::main(flavor = "current_thread")]
async fn main() {
    // Rust ignores SIGPIPE, so printing into a closed pipe (`mobilis analyses | head -3`)
    // would panic with "Broken pipe". Command-line tools end quietly there instead: restore
    // the default action, which ends the process when the reader has gone.
    #[cfg(unix)]
    // SAFETY: the disposition is process-wide and may be set at any time; SIG_DFL is a valid
    // action for SIGPIPE and no handler of ours is replaced.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    // `--help` of mobilis and of `mobilis import` ends with the units --unit accepts, from
    // the unit table itself.
    let command = <Cli as clap::CommandFactory>::command()
        .after_long_help(accepted_units_help())
        .mut_subcommand("import", |import| import.after_long_help(accepted_units_help()));
    let cli =
        <Cli as clap::FromArgMatches>::from_arg_matches(&command.get_matches()).unwrap_or_else(|error| error.exit());
    let words = match &cli.command {
        Command::Call { .. } => cli_errors::Words::Json,
        Command::Pipeline { .. } | Command::Demo { .. } => cli_errors::Words::PipelineFile,
        _ => cli_errors::Words::Options,
    };
    if let Err(error) = run(cli).await {
        eprintln!("error: {}", cli_errors::describe(&error, words));
        std::process::exit(1);
    }
}

async fn connect(cli: &Cli) -> anyhow::Result<Client> {
    Client::connect(&cli.url, cli.token.as_deref())
        .await
        .with_context(|| format!("is a daemon running at {}? start one with `mobilis serve`", cli.url))
}

async fn run(cli: Cli) -> anyhow::Result<()> {
    match &cli.command {
        Command::Serve { arguments } => {
            let binary = mobilis_client::locate_daemon().context("cannot find mobilisd next to mobilis")?;
            let status = std::process::Command::new(binary).args(arguments).status()?;
            if !status.success() {
                bail!("mobilisd exited with {status}");
            }
            Ok(())
        }
        Command::Demo {
            data,
            workspace,
            reports,
        } => demo::run(data.clone(), workspace.clone(), reports.clone(), cli.progress).await,
        Command::Info => {
            let info = connect(&cli)
                .await?
                .request::<method::ServerInfoMethod>(&NoParams {})
                .await?;
            print_json(&serde_json::to_value(info)?)
        }
        Command::Analyses => {
            let list = connect(&cli)
                .await?
                .request::<method::AnalysisList>(&NoParams {})
                .await?;
            for entry in list {
                println!("{:<32} {}", entry.name, entry.summary);
            }
            Ok(())
        }
        Command::Describe { analysis } => {
            let description = connect(&cli)
                .await?
                .request::<method::AnalysisDescribe>(&AnalysisName {
                    analysis: analysis.clone(),
                })
                .await?;
            print!(
                "{}",
                describe::render(&serde_json::to_value(description).expect("a description serialises"))
            );
            Ok(())
        }
        Command::Datasets { prefix } => {
            let client = connect(&cli).await?;
            // dataset.list answers a page at a time; walk the pages until total is reached.
            let mut offset = 0;
            loop {
                let params = ListParams {
                    offset,
                    limit: Some(1000),
                    prefix: prefix.clone(),
                };
                let page = client.request::<method::DatasetList>(&params).await?;
                for entry in &page.datasets {
                    println!(
                        "{:<32} {:>10} rows {:>4} columns",
                        entry.name, entry.rows, entry.column_count
                    );
                }
                offset += page.datasets.len();
                if page.datasets.is_empty() || offset >= page.total {
                    break;
                }
            }
            Ok(())
        }
        Command::Import {
            name,
            path,
            layout,
            overwrite,
        } => {
            let params = ImportParams {
                name: name.clone(),
                path: Some(absolute(path)?),
                overwrite: *overwrite,
                ..layout.recipe()?.to_params()?
            };
            let result = connect(&cli).await?.request::<method::DatasetImport>(&params).await?;
            println!("imported {} ({} rows)", result.name, result.rows);
            for note in &result.notes {
                println!("  note: {note}");
            }
            Ok(())
        }
        Command::Run {
            analysis,
            inputs,
            output,
            params,
            group_by,
            group_tolerance,
            overwrite,
            summary_output,
            deadline,
        } => {
            let params: serde_json::Map<String, Value> =
                serde_json::from_str(params).context("--params must be a JSON object")?;
            let request = RunParams {
                analysis: analysis.clone(),
                inputs: inputs.iter().cloned().collect(),
                params: Some(params),
                output: output.clone(),
                group_by: (!group_by.is_empty()).then(|| GroupBy::Many(group_by.clone())),
                group_tolerance: (!group_tolerance.is_empty()).then(|| group_tolerance.iter().cloned().collect()),
                overwrite: *overwrite,
                call_id: None,
                summary_output: summary_output.clone(),
            };
            let mut bar = ProgressBar::new(cli.progress);
            let result = connect(&cli)
                .await?
                .request_with_progress::<method::AnalysisRun>(&request, deadline.map(f64::from), |event| {
                    bar.update(event)
                })
                .await?;
            drop(bar);
            print_run_result(&result);
            Ok(())
        }
        Command::Pipeline { file } => {
            let client = connect(&cli).await?;
            let mut bar = ProgressBar::new(cli.progress);
            let results = pipeline_file::run(&client, file, |event| bar.update(event)).await?;
            drop(bar);
            for result in &results {
                print_run_result(result);
            }
            Ok(())
        }
        Command::Show {
            name,
            offset,
            limit,
            columns,
            si,
        } => {
            let client = connect(&cli).await?;
            let params = RowsParams {
                name: name.clone(),
                offset: *offset,
                limit: Some(*limit),
            };
            let page = client.request::<method::DatasetRows>(&params).await?;
            let present: Vec<&str> = page.columns.keys().map(String::as_str).collect();
            let unknown: Vec<&str> = columns
                .iter()
                .map(String::as_str)
                .filter(|column| !present.contains(column))
                .collect();
            if !unknown.is_empty() {
                bail!(
                    "{name} has no column {}; --column takes the stored names (SI units), which are: {}",
                    unknown.join(", "),
                    present.join(", ")
                );
            }
            let rendered = table::render(&Value::Object(page.columns.clone()), columns, !si);
            print!("{rendered}");
            let total = page.total_rows as u64;
            println!(
                "rows {}..{} of {total}",
                offset,
                (*offset as u64 + *limit as u64).min(total)
            );
            Ok(())
        }
        Command::Export {
            name,
            path,
            format,
            units,
            overwrite,
        } => {
            let params = ExportParams {
                name: name.clone(),
                path: absolute(path)?,
                format: format.as_deref().map(table_format).transpose()?,
                units: match units {
                    ExportUnits::Si => mobilis_protocol::params::ExportUnits::Si,
                    ExportUnits::Customary => mobilis_protocol::params::ExportUnits::Customary,
                },
                overwrite: *overwrite,
            };
            let result = connect(&cli).await?.request::<method::DatasetExport>(&params).await?;
            println!("wrote {} rows to {} ({} units)", result.rows, result.path, result.units);
            Ok(())
        }
        Command::Plot {
            dataset,
            kind,
            filter,
            x,
            y,
            series_by,
            out,
            vega_lite,
            list,
        } => {
            let client = connect(&cli).await?;
            if *list {
                let kinds = client
                    .request::<method::PlotKinds>(&mobilis_protocol::params::DatasetFilter {
                        dataset: Some(dataset.clone()),
                    })
                    .await?;
                for kind in kinds {
                    println!("{:<28} {}", kind.name, kind.description);
                }
                return Ok(());
            }
            let params = PlotParams {
                dataset: dataset.clone(),
                kind: kind.clone(),
                filter: Some(
                    filter
                        .iter()
                        .map(|(column, value)| (column.clone(), filter_value(value)))
                        .collect(),
                ),
                x: x.clone(),
                y: (!y.is_empty()).then(|| y.clone()),
                series_by: (!series_by.is_empty()).then(|| series_by.clone()),
                ..Default::default()
            };
            let figure = client.request::<method::PlotRender>(&params).await?;
            let kind = figure.kind.as_str();
            let out = out
                .clone()
                .unwrap_or_else(|| PathBuf::from(format!("{dataset}-{kind}.svg")));
            std::fs::write(&out, figure.svg.as_deref().unwrap_or(""))
                .with_context(|| format!("cannot write {}", out.display()))?;
            println!("wrote {} ({kind})", out.display());
            if let Some(path) = vega_lite {
                std::fs::write(path, serde_json::to_string_pretty(&figure.vega_lite)?)
                    .with_context(|| format!("cannot write {}", path.display()))?;
                println!("wrote {}", path.display());
            }
            Ok(())
        }
        Command::Report { out, sample, pdf } => {
            report_files::write_reports_as(&connect(&cli).await?, out, sample, *pdf).await?;
            Ok(())
        }
        Command::Call { method, params } => {
            let params: Value = serde_json::from_str(params).context("parameters must be JSON")?;
            print_json(&connect(&cli).await?.call(method, params).await?)
        }
    }
}

/// A `--where` value: a number when it reads as one, else text.
fn filter_value(text: &str) -> FilterValue {
    match text.parse::<f64>() {
        Ok(number) if number.is_finite() => FilterValue::Number(number),
        _ => FilterValue::Text(text.to_owned()),
    }
}

/// A `--format` value as the protocol names table formats.
fn table_format(text: &str) -> anyhow::Result<TableFormat> {
    serde_json::from_value(Value::String(text.to_owned()))
        .map_err(|_| anyhow::anyhow!("--format must be csv, parquet or ipc (got `{text}`)"))
}

fn print_json(value: &Value) -> anyhow::Result<()> {
    println!("{}", serde_json::to_string_pretty(value)?);
    Ok(())
}

fn print_run_result(result: &mobilis_protocol::results::RunResult) {
    let result = serde_json::to_value(result).expect("a run result serialises");
    print!("{}", summary::render_run(&result));
}
