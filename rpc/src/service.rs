//! What the daemon does, independent of how requests arrive: datasets, analyses,
//! pipelines. The JSON-RPC layer (`methods`) only parses parameters and calls in here.

use crate::csv_dialect::CsvDialect;
use crate::data_roots::DataRoots;
use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use crate::plugin_host::{CallControl, InvokeFailure, PluginHost};
use crate::progress::{Outcome, ProgressHub};
use mobilis_sdk::param_schema;
// The JSON of table cells is written beside the `dataset.rows` page that shares its rules.
use crate::rows_json::cell_to_json;
pub use crate::rows_json::frame_to_json_columns;
use crate::store::{self, DatasetStore, Provenance};
use crate::tables::{self, FileFormat};
use mobilis_sdk::abi::{self, ColumnSpec, ColumnType};
use polars::prelude::*;
use serde_json::Value;
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};
use std::sync::atomic::Ordering;
use std::sync::{Arc, Mutex};

pub struct Service {
    pub store: DatasetStore,
    pub host: PluginHost,
    pub roots: DataRoots,
    pub workspace: PathBuf,
    running: Mutex<HashMap<String, Arc<CallControl>>>,
    /// Progress events of calls that carry a `call_id`, for subscribers.
    pub progress_hub: Arc<ProgressHub>,
}

pub use mobilis_protocol::params::{
    ExportParams, GroupBy, ImportParams, ListParams, PipelineParams, RowsParams, RunParams, DEFAULT_LIST_PAGE,
    MAX_LIST_PAGE, MAX_ROWS_PER_CALL,
};
mod groups;

use groups::group_rows;
pub use groups::{summary_table, RunSummary};

use mobilis_protocol::results::{
    AbiVersion, AnalysisDescription, AnalysisEntry, CancelResult, DatasetEntry, DatasetInfo, DatasetPage,
    DatasetSummary, Dropped, Exported, GroupSummary, GroupedSummary, LoadedPlugin, MemoryUse, PipelineResult,
    PluginEntry, PluginIdentity, ProgressState, RefusedPlugin, RunResult, ServerInfo,
};

/// The group columns of a run: none, one or several.
fn group_columns(group_by: &Option<GroupBy>) -> Vec<String> {
    group_by.as_ref().map(GroupBy::columns).unwrap_or_default()
}

/// The `group_tolerance` of each group column, in the order of `columns`.
fn group_tolerances(run: &RunParams, columns: &[String]) -> Vec<Option<f64>> {
    columns
        .iter()
        .map(|column| {
            run.group_tolerance
                .as_ref()
                .and_then(|tolerances| tolerances.get(column).copied())
        })
        .collect()
}

/// Refuses a `group_tolerance` that names a column the run does not group by, or a
/// tolerance that is not a positive finite number.
fn check_group_tolerance(run: &RunParams) -> ServiceResult<()> {
    let columns = group_columns(&run.group_by);
    for (column, tolerance) in run.group_tolerance.iter().flatten() {
        if !columns.contains(column) {
            return Err(ServiceError::invalid_params(format!(
                "group_tolerance names `{column}`, which is not a group_by column"
            ))
            .with_help(if columns.is_empty() {
                format!("add group_by [\"{column}\"], or leave group_tolerance out")
            } else {
                format!("the run groups by {}; add `{column}` to group_by", columns.join(", "))
            })
            .with_param("group_tolerance"));
        }
        if !(tolerance.is_finite() && *tolerance > 0.0) {
            return Err(ServiceError::invalid_params(format!(
                "group_tolerance of `{column}` must be a positive number, got {tolerance}"
            ))
            .with_help("the widest gap between sorted values that stays within one group, in the column's unit (0.5 for a temperature in K)")
            .with_param("group_tolerance"));
        }
    }
    Ok(())
}

/// A running call registered under its `call_id`; unregistered, with its end announced,
/// when dropped, so that no return path can leave a stale entry behind.
struct RegisteredCall<'a> {
    service: &'a Service,
    call_id: Option<String>,
    control: Arc<CallControl>,
    outcome: Option<(Outcome, Option<String>)>,
}

impl Drop for RegisteredCall<'_> {
    fn drop(&mut self) {
        if let Some(id) = &self.call_id {
            self.service.running.lock().expect("running calls").remove(id);
            let (outcome, message) = self
                .outcome
                .take()
                .unwrap_or((Outcome::Failed, Some("the call stopped unexpectedly".into())));
            self.service.progress_hub.end(id, outcome, message.as_deref());
        }
    }
}

impl RegisteredCall<'_> {
    fn finish<T>(&mut self, result: &ServiceResult<T>) {
        self.outcome = Some(match result {
            Ok(_) => (Outcome::Done, None),
            Err(error) if error.kind == ErrorKind::Cancelled => (Outcome::Cancelled, Some(error.message.clone())),
            Err(error) => (Outcome::Failed, Some(error.message.clone())),
        });
    }
}

/// A duration in milliseconds, for timing logs.
fn millis(duration: std::time::Duration) -> f64 {
    duration.as_secs_f64() * 1e3
}

fn invoke_error(analysis: &str, failure: InvokeFailure) -> ServiceError {
    let kind = match failure.status {
        abi::STATUS_INVALID_INPUT => ErrorKind::InvalidData,
        abi::STATUS_NUMERICAL_FAILURE => ErrorKind::NumericalFailure,
        abi::STATUS_CANCELLED => ErrorKind::Cancelled,
        abi::STATUS_UNKNOWN_ANALYSIS => ErrorKind::UnknownAnalysis,
        _ => ErrorKind::PluginFailure,
    };
    let error = ServiceError::new(kind, format!("{analysis}: {}", failure.message));
    match kind {
        ErrorKind::PluginFailure => {
            error.with_help("this is a bug in the plugin; the daemon and its datasets are unaffected")
        }
        _ => error,
    }
}

/// Casts one declared column to the type the plugin expects, or says why it cannot.
fn conform_column(frame: &mut DataFrame, spec: &ColumnSpec, role: &str, dataset: &str) -> ServiceResult<()> {
    let Ok(column) = frame.column(&spec.name) else {
        if !spec.required {
            return Ok(());
        }
        let present: Vec<String> = frame.get_column_names().iter().map(|n| n.to_string()).collect();
        let unit = spec
            .unit
            .as_deref()
            .map(|u| format!(" (SI unit {u})"))
            .unwrap_or_default();
        return Err(ServiceError::new(
            ErrorKind::ColumnProblem,
            format!(
                "input `{role}` (dataset `{dataset}`) lacks the required column `{}`{unit}",
                spec.name
            ),
        )
        .with_help(format!(
            "the dataset has: {}; rename a column at import (dataset.import rename, units)",
            present.join(", ")
        )));
    };
    let dtype = column.dtype().clone();
    // A column with no value at all (an all-empty column of a CSV file imports as text)
    // says nothing in any type: it is the declared type's nulls, as if every cell were empty.
    if !column.is_empty() && column.null_count() == column.len() && !dtype.is_null() {
        let nulls = Column::full_null(spec.name.as_str().into(), column.len(), &DataType::Null);
        frame
            .with_column(nulls)
            .map_err(|e| ServiceError::new(ErrorKind::ColumnProblem, e.to_string()))?;
        return conform_column(frame, spec, role, dataset);
    }
    let mistyped = |expected: &str| {
        ServiceError::new(
            ErrorKind::ColumnProblem,
            format!(
                "column `{}` of input `{role}` (dataset `{dataset}`) holds {dtype}, expected {expected}",
                spec.name
            ),
        )
        .with_help(format!(
            "give `{}` {expected}{} in every cell (an empty cell is no value), and import the dataset again (dataset.import); a column with no value at all is accepted whatever its type",
            spec.name,
            spec.unit.as_deref().map(|unit| format!(" (SI unit {unit})")).unwrap_or_default(),
        ))
    };
    let target = match spec.dtype {
        ColumnType::F64 if dtype.is_primitive_numeric() || dtype.is_null() => DataType::Float64,
        ColumnType::F64 => return Err(mistyped("numbers")),
        ColumnType::I64 if dtype.is_integer() || dtype.is_null() => DataType::Int64,
        ColumnType::I64 if dtype.is_float() => {
            let values = column.cast(&DataType::Float64).expect("float cast");
            let whole = values
                .f64()
                .expect("f64")
                .iter()
                .flatten()
                .all(|v| v.fract() == 0.0 && v.abs() < 9e15);
            if !whole {
                return Err(mistyped("whole numbers"));
            }
            DataType::Int64
        }
        ColumnType::I64 => return Err(mistyped("whole numbers")),
        ColumnType::Str if dtype.is_string() || dtype.is_null() => DataType::String,
        ColumnType::Str => return Err(mistyped("text")),
        ColumnType::Bool if dtype == DataType::Boolean || dtype.is_null() => DataType::Boolean,
        ColumnType::Bool => return Err(mistyped("booleans")),
    };
    if dtype != target {
        let cast = column.cast(&target).map_err(|_| mistyped(&target.to_string()))?;
        frame
            .with_column(cast)
            .map_err(|e| ServiceError::new(ErrorKind::ColumnProblem, e.to_string()))?;
    }
    Ok(())
}

/// A run's input tables, type-checked, and what the output's provenance says of them.
struct PreparedInputs {
    /// Role and table, in the analysis's declaration order.
    tables: Vec<(String, DataFrame)>,
    /// The stored version of each input as it was read, role to version.
    versions: BTreeMap<String, String>,
}

/// Refuses to store a run's `output` (or `summary_output`, named by `param`) under the name of
/// one of the run's own inputs: with `overwrite` that would replace the data the run read
/// (raw readings, say) by what it made of them, and the output's provenance would name
/// itself as its input.
fn refuse_writing_onto_input(run: &RunParams, name: &str, param: &str) -> ServiceResult<()> {
    match run.inputs.iter().find(|(_, dataset)| dataset.as_str() == name) {
        Some((role, _)) => Err(ServiceError::invalid_params(format!(
            "{param} `{name}` is the dataset {} reads as input `{role}`: choose another {param} name (storing there would replace the data the output is computed from)",
            run.analysis
        ))
        .with_help(format!("`{name}` stays as stored"))
        .with_param(param)),
        None => Ok(()),
    }
}

impl Service {
    pub fn new(store: DatasetStore, host: PluginHost, roots: DataRoots, workspace: PathBuf) -> Self {
        Service {
            store,
            host,
            // Whatever the roots, imports and exports never touch the workspace.
            roots: roots.keeping_out(&workspace),
            workspace,
            running: Mutex::new(HashMap::new()),
            progress_hub: Arc::new(ProgressHub::default()),
        }
    }

    pub fn server_info(&self) -> ServerInfo {
        let (stored_bytes, budget_bytes) = self.store.memory_usage();
        ServerInfo {
            name: "mobilisd".into(),
            version: env!("CARGO_PKG_VERSION").into(),
            abi: AbiVersion {
                major: abi::ABI_MAJOR,
                minor: abi::ABI_MINOR,
            },
            workspace: self.workspace.display().to_string(),
            data_roots: self.roots.roots().iter().map(|r| r.display().to_string()).collect(),
            plugins: self
                .host
                .plugins
                .iter()
                .map(|p| LoadedPlugin {
                    name: p.name.clone(),
                    version: p.version.clone(),
                    isolation: p.isolation.as_str().into(),
                })
                .collect(),
            refused_plugins: self
                .host
                .refused
                .iter()
                .map(|r| RefusedPlugin {
                    file: r.file.display().to_string(),
                    reason: r.reason.clone(),
                })
                .collect(),
            damaged_files: self
                .store
                .damaged()
                .iter()
                .map(|d| mobilis_protocol::results::DamagedFile {
                    file: d.file.clone(),
                    reason: d.reason.clone(),
                })
                .collect(),
            memory: MemoryUse {
                stored_bytes,
                budget_bytes,
            },
        }
    }

    pub fn plugin_list(&self) -> Vec<PluginEntry> {
        self.host
            .plugins
            .iter()
            .map(|p| PluginEntry {
                name: p.name.clone(),
                version: p.version.clone(),
                abi_minor: p.abi_minor,
                library: p.file.display().to_string(),
                features: p.features.clone(),
                analyses: p.analyses.clone(),
                isolation: p.isolation.as_str().into(),
            })
            .collect()
    }

    pub fn analysis_list(&self) -> Vec<AnalysisEntry> {
        self.host
            .analyses
            .iter()
            .map(|(name, entry)| AnalysisEntry {
                name: name.clone(),
                plugin: self.host.plugins[entry.plugin_index].name.clone(),
                summary: entry.declaration.summary.clone(),
            })
            .collect()
    }

    fn unknown_analysis(&self, name: &str) -> ServiceError {
        let known: Vec<&str> = self.host.analyses.keys().map(String::as_str).collect();
        let closest = crate::suggest::closest_names(name, known.iter().copied());
        let help = match (closest.as_slice(), known.is_empty()) {
            (_, true) => "loaded analyses: none".to_owned(),
            ([], false) => format!("loaded analyses: {}", known.join(", ")),
            (closest, false) => format!(
                "did you mean {}? loaded analyses: {}",
                closest.join(" or "),
                known.join(", ")
            ),
        };
        ServiceError::new(ErrorKind::UnknownAnalysis, format!("no analysis named `{name}`"))
            .with_help(help)
            .with_param("analysis")
    }

    pub fn analysis_describe(&self, name: &str) -> ServiceResult<AnalysisDescription> {
        let entry = self
            .host
            .analyses
            .get(name)
            .ok_or_else(|| self.unknown_analysis(name))?;
        let plugin = &self.host.plugins[entry.plugin_index];
        let Value::Object(declaration) = serde_json::to_value(&entry.declaration).expect("declaration serialises")
        else {
            unreachable!("a declaration serialises as an object")
        };
        Ok(AnalysisDescription {
            declaration,
            plugin: PluginIdentity {
                name: plugin.name.clone(),
                version: plugin.version.clone(),
            },
        })
    }

    fn dataset_summary(dataset: &store::Dataset) -> DatasetSummary {
        DatasetSummary {
            name: dataset.manifest.name.clone(),
            rows: dataset.manifest.rows,
            columns: dataset.manifest.columns.clone(),
            notes: Vec::new(),
        }
    }

    /// One page of the stored datasets, lean entries only (`dataset.info` has the columns and
    /// provenance): the whole list at thousands of datasets was megabytes per call.
    pub fn dataset_list(&self, params: ListParams) -> ServiceResult<DatasetPage> {
        let limit = params.limit.unwrap_or(DEFAULT_LIST_PAGE);
        if limit > MAX_LIST_PAGE {
            return Err(ServiceError::invalid_params(format!(
                "limit {limit} is above {MAX_LIST_PAGE} datasets per page"
            ))
            .with_help(
                "page through the list with offset and limit (total says how many there are), or narrow it with prefix",
            )
            .with_param("limit"));
        }
        let prefix = params.prefix.as_deref().unwrap_or("");
        // The store keeps datasets in name order, so pages are stable between calls.
        let matching: Vec<_> = self
            .store
            .list()
            .into_iter()
            .filter(|d| d.manifest.name.starts_with(prefix))
            .collect();
        let total = matching.len();
        let datasets: Vec<DatasetEntry> = matching
            .iter()
            .skip(params.offset)
            .take(limit)
            .map(|d| DatasetEntry {
                name: d.manifest.name.clone(),
                rows: d.manifest.rows,
                column_count: d.manifest.columns.len(),
            })
            .collect();
        Ok(DatasetPage {
            total,
            offset: params.offset.min(total),
            datasets,
        })
    }

    pub fn dataset_info(&self, name: &str) -> ServiceResult<DatasetInfo> {
        let dataset = self.store.get(name)?;
        Ok(DatasetInfo {
            name: dataset.manifest.name.clone(),
            rows: dataset.manifest.rows,
            columns: dataset.manifest.columns.clone(),
            created: dataset.manifest.created.clone(),
            version: dataset.manifest.version.clone(),
            provenance: serde_json::to_value(&dataset.manifest.provenance).expect("provenance serialises"),
        })
    }

    pub fn dataset_drop(&self, name: &str) -> ServiceResult<Dropped> {
        crate::bounded_calls::commit(|| self.store.remove(name))?;
        Ok(Dropped {
            dropped: name.to_owned(),
        })
    }

    pub fn dataset_import(&self, params: ImportParams) -> ServiceResult<DatasetSummary> {
        let title = format!("dataset.import -> {}", params.name);
        let mut call = self.register_call(params.call_id.as_deref(), &title)?;
        let result = self.dataset_import_under(params, &call.control);
        call.finish(&result);
        result
    }

    /// [`Self::dataset_import`] reporting its stages to `control`: reading the file,
    /// parsing it, converting units, storing. The shares of the whole are rough, from where
    /// the time of a large CSV import goes; a cancel is honoured between stages.
    fn dataset_import_under(&self, params: ImportParams, control: &Arc<CallControl>) -> ServiceResult<DatasetSummary> {
        let stage = |fraction: f64, message: &str| -> ServiceResult<()> {
            if control.cancelled.load(Ordering::Relaxed) {
                return Err(ServiceError::new(
                    ErrorKind::Cancelled,
                    format!("dataset.import of `{}`: cancelled by the client", params.name),
                ));
            }
            control.record(fraction, message);
            Ok(())
        };
        store::validate_name(&params.name)?;
        if !params.overwrite && self.store.contains(&params.name) {
            return Err(ServiceError::new(
                ErrorKind::DatasetExists,
                format!("a dataset named `{}` exists already", params.name),
            )
            .with_help("choose another name, drop the old dataset, or pass overwrite: true"));
        }
        let units_text: BTreeMap<String, String> = params
            .units
            .iter()
            .map(|(c, u)| (c.clone(), u.unit().to_owned()))
            .collect();
        let started = std::time::Instant::now();
        let mut read_done = std::time::Duration::ZERO;
        let mut parquet_source = None;
        let (frame, source_map, provenance) = match (&params.path, &params.columns) {
            (Some(path), None) => {
                let (resolved, opened) = self.roots.open_readable(Path::new(path))?;
                let format = match params.format {
                    Some(name) => FileFormat::parse(name.name())?,
                    None => FileFormat::from_extension(&resolved)?,
                };
                if params.csv.is_some() && format != FileFormat::Csv {
                    return Err(ServiceError::invalid_params(format!(
                        "csv options apply to CSV files; {} is read as {}",
                        resolved.display(),
                        format.name()
                    ))
                    .with_help("leave out csv, or pass format: csv if the file is CSV text"));
                }
                let dialect = params.csv.clone().unwrap_or_default();
                stage(0.0, "reading the file")?;
                let rename = &params.rename;
                // The contacts pair notation (`21,34`) keeps its comma under decimal_comma.
                let keeps_commas = |name: &str| rename.get(name).map(String::as_str).unwrap_or(name) == "contacts";
                // Parsed while the bytes' checksum is computed beside.
                let (source, parsed) = tables::load_opened_while(&resolved, opened, |bytes| {
                    read_done = started.elapsed();
                    stage(0.2, "parsing")?;
                    tables::read_bytes(&resolved, bytes, format, &dialect, keeps_commas)
                })?;
                let (frame, map) = parsed?;
                // A Parquet file whose frame is stored as decoded (nothing renamed, no
                // units) is stored as its own bytes with the manifest in the footer: it
                // reads back to this very frame, and encoding it again would be the
                // import's largest cost. Otherwise the bytes go here, before the store.
                let unchanged = format == FileFormat::Parquet && params.rename.is_empty() && params.units.is_empty();
                parquet_source = unchanged.then_some(source.bytes);
                let provenance = Provenance::File {
                    path: resolved.display().to_string(),
                    format: format.name().into(),
                    units: units_text,
                    rename: params.rename.clone(),
                    csv: params.csv.clone().filter(|d| *d != CsvDialect::default()),
                    sha256: Some(source.sha256),
                    size_bytes: Some(source.size_bytes),
                    modified: source.modified,
                };
                (frame, map, provenance)
            }
            (None, Some(columns)) => {
                if params.csv.is_some() {
                    return Err(
                        ServiceError::invalid_params("csv options apply to files, not to inline columns")
                            .with_help("leave out csv when sending columns"),
                    );
                }
                (
                    tables::frame_from_json_columns(columns)?,
                    None,
                    Provenance::Inline { units: units_text },
                )
            }
            _ => {
                return Err(
                    ServiceError::invalid_params("give exactly one of `path` and `columns`").with_help(
                        "path: a CSV, Parquet or Arrow IPC file inside the data roots; columns: {\"name\": [values]}",
                    ),
                )
            }
        };
        let parse_done = started.elapsed();
        stage(0.6, "converting units")?;
        let frame = tables::apply_rename(frame, &params.rename)?;
        let frame = tables::apply_units(frame, &params.units, source_map.as_ref())?;
        let mut notes = match (&source_map, params.csv.as_ref().is_some_and(|d| d.decimal_comma)) {
            (Some(map), false) => tables::decimal_comma_notes(&frame, map),
            _ => Vec::new(),
        };
        if let Some(map) = &source_map {
            notes.extend(tables::unparsed_number_notes(&frame, map));
            notes.extend(tables::not_a_number_notes(&frame, map));
        }
        if source_map.is_some() || params.columns.is_some() {
            notes.extend(tables::empty_column_notes(&frame));
        }
        let units_done = started.elapsed();
        stage(0.7, "storing")?;
        let new = store::NewDataset {
            name: params.name.clone(),
            frame,
            provenance,
            parquet_source,
        };
        let dataset = crate::bounded_calls::commit(|| self.store.insert_all(vec![new], params.overwrite))?.remove(0);
        tracing::debug!(
            dataset = %params.name,
            read_ms = millis(read_done),
            parse_ms = millis(parse_done.saturating_sub(read_done)),
            units_ms = millis(units_done - parse_done),
            store_ms = millis(started.elapsed() - units_done),
            "dataset.import timings"
        );
        Ok(DatasetSummary {
            notes,
            ..Self::dataset_summary(&dataset)
        })
    }

    pub fn dataset_export(&self, params: ExportParams) -> ServiceResult<Exported> {
        let dataset = self.store.get(&params.name)?;
        let format = match params.format {
            Some(name) => FileFormat::parse(name.name())?,
            None => FileFormat::from_extension(Path::new(&params.path))?,
        };
        let frame = match params.units {
            crate::customary::ExportUnits::Si => dataset.frame.clone(),
            crate::customary::ExportUnits::Customary => crate::customary::to_customary(&dataset.frame)?,
        };
        // A temporary file renamed into place: readers never see half a file, and an
        // existing file is replaced only with overwrite.
        let target = self.roots.place(
            Path::new(&params.path),
            params.overwrite,
            |file| {
                tables::write_into(&frame, file, format).map_err(|e| {
                    ServiceError::new(ErrorKind::FileProblem, format!("cannot write {}: {e}", params.path))
                })
            },
            |rename| crate::bounded_calls::commit(rename),
        )?;
        let columns: Vec<String> = frame.get_column_names().iter().map(|n| n.to_string()).collect();
        Ok(Exported {
            name: params.name,
            path: target.display().to_string(),
            format: format.name().into(),
            rows: frame.height(),
            units: params.units.name().into(),
            columns,
        })
    }

    pub fn dataset_rows(&self, params: RowsParams) -> ServiceResult<Box<serde_json::value::RawValue>> {
        let dataset = self.store.get(&params.name)?;
        let limit = params.limit.unwrap_or(1000);
        if limit > MAX_ROWS_PER_CALL {
            return Err(
                ServiceError::invalid_params(format!("limit {limit} is above {MAX_ROWS_PER_CALL}"))
                    .with_help("page through the dataset with offset and limit, or export it to a file"),
            );
        }
        let total = dataset.frame.height();
        let offset = params.offset.min(total);
        let slice = dataset.frame.slice(offset as i64, limit);
        crate::rows_json::rows_page(total, offset, &slice).map_err(|error| {
            ServiceError::new(
                ErrorKind::InvalidData,
                format!("dataset `{}` could not be written as JSON: {error}", params.name),
            )
        })
    }

    /// Registers a call under its `call_id` (if any) with progress going to the hub, and
    /// announces its beginning. Refuses an id that is in use.
    fn register_call(&self, call_id: Option<&str>, title: &str) -> ServiceResult<RegisteredCall<'_>> {
        let Some(id) = call_id else {
            let control = Arc::new(CallControl::default());
            crate::bounded_calls::watch(&control);
            return Ok(RegisteredCall {
                service: self,
                call_id: None,
                control,
                outcome: None,
            });
        };
        if id.is_empty() {
            return Err(ServiceError::invalid_params("call_id must not be empty"));
        }
        let hub = self.progress_hub.clone();
        let owned_id = id.to_owned();
        let control = Arc::new(CallControl::with_listener(Box::new(move |fraction, message| {
            hub.report(&owned_id, fraction, message)
        })));
        {
            let mut running = self.running.lock().expect("running calls");
            if running.contains_key(id) {
                return Err(
                    ServiceError::invalid_params(format!("a call with call_id `{id}` is running already"))
                        .with_help("choose a call_id that is unique among running calls, for example a UUID"),
                );
            }
            running.insert(id.to_owned(), control.clone());
        }
        crate::bounded_calls::watch(&control);
        self.progress_hub.begin(id, title);
        Ok(RegisteredCall {
            service: self,
            call_id: Some(id.to_owned()),
            control,
            outcome: None,
        })
    }

    /// Sets the cancel flag of a running call.
    pub fn cancel(&self, call_id: &str) -> CancelResult {
        let running = self.running.lock().expect("running calls");
        let cancelled = match running.get(call_id) {
            Some(control) => {
                control.cancelled.store(true, Ordering::Relaxed);
                true
            }
            None => false,
        };
        CancelResult {
            call_id: call_id.to_owned(),
            cancelled,
            reason: (!cancelled).then(|| "no running call with that id".to_owned()),
        }
    }

    /// Progress last reported by a running call.
    pub fn progress(&self, call_id: &str) -> ProgressState {
        let running = self.running.lock().expect("running calls");
        let (fraction, message) = running
            .get(call_id)
            .and_then(|c| c.progress.lock().ok().and_then(|p| p.clone()))
            .map_or((None, None), |(fraction, message)| (Some(fraction), Some(message)));
        ProgressState {
            call_id: call_id.to_owned(),
            running: running.contains_key(call_id),
            fraction,
            message,
        }
    }

    /// Refuses input roles the analysis does not declare and required roles not given.
    fn check_roles(&self, run: &RunParams, declaration: &abi::AnalysisDeclaration) -> ServiceResult<()> {
        let declared: Vec<&str> = declaration.inputs.iter().map(|r| r.role.as_str()).collect();
        for role in run.inputs.keys() {
            if !declared.contains(&role.as_str()) {
                return Err(
                    ServiceError::invalid_params(format!("{} has no input role `{role}`", run.analysis))
                        .with_help(format!("its roles are: {}", declared.join(", ")))
                        .with_param(format!("inputs.{role}")),
                );
            }
        }
        for role in declaration.inputs.iter().filter(|role| role.required) {
            if !run.inputs.contains_key(&role.role) {
                return Err(
                    ServiceError::invalid_params(format!("{} needs input role `{}`", run.analysis, role.role))
                        .with_help(format!("pass inputs: {{\"{}\": \"<dataset>\"}}", role.role))
                        .with_param(format!("inputs.{}", role.role)),
                );
            }
        }
        Ok(())
    }

    /// Resolves and type-checks the inputs of a run whose roles [`Self::check_run`] passed.
    fn prepare_inputs(&self, run: &RunParams) -> ServiceResult<PreparedInputs> {
        let entry = self
            .host
            .analyses
            .get(&run.analysis)
            .ok_or_else(|| self.unknown_analysis(&run.analysis))?;
        let mut prepared = Vec::new();
        let mut versions = BTreeMap::new();
        for role in &entry.declaration.inputs {
            let Some(dataset_name) = run.inputs.get(&role.role) else {
                continue;
            };
            // The version comes from the very table read: a drop or overwrite of the name
            // while the run goes on does not change what the output's provenance names.
            let dataset = self.store.get(dataset_name)?;
            if let Some(version) = &dataset.manifest.version {
                versions.insert(role.role.clone(), version.clone());
            }
            let mut frame = dataset.frame.clone();
            drop(dataset);
            for column in &role.columns {
                conform_column(&mut frame, column, &role.role, dataset_name)?;
            }
            prepared.push((role.role.clone(), frame));
        }
        Ok(PreparedInputs {
            tables: prepared,
            versions,
        })
    }

    /// Everything about a run that can be checked without reading its inputs: the output
    /// names (free, or `overwrite`; never one of the run's own inputs), the analysis, its
    /// input roles, and its parameters against the analysis's declared schema (the same
    /// validation the plugin's own tests run through `sdk::run_typed`). `analysis.run`
    /// checks this before it reads anything, `pipeline.run` for every step before the first
    /// one runs. Returns the parameters as the plugin gets them.
    fn check_run(&self, run: &RunParams) -> ServiceResult<Value> {
        store::validate_name(&run.output)?;
        if !run.overwrite && self.store.contains(&run.output) {
            return Err(ServiceError::new(
                ErrorKind::DatasetExists,
                format!("a dataset named `{}` exists already", run.output),
            )
            .with_help("choose another output name, drop the old dataset, or pass overwrite: true")
            .with_param("output"));
        }
        refuse_writing_onto_input(run, &run.output, "output")?;
        let entry = self
            .host
            .analyses
            .get(&run.analysis)
            .ok_or_else(|| self.unknown_analysis(&run.analysis))?;
        let params = Value::Object(run.params.clone().unwrap_or_default());
        param_schema::validate(&entry.declaration.params, &params).map_err(|message| {
            // The message starts with the path of the offending parameter (`params.x`).
            let param = message
                .split_whitespace()
                .next()
                .unwrap_or("params")
                .trim_end_matches(':');
            let param = param.split('[').next().unwrap_or(param).to_owned();
            ServiceError::invalid_params(format!("{}: {message}", run.analysis))
                .with_help(format!(
                    "see analysis.describe {{\"analysis\": \"{}\"}} for the parameters",
                    run.analysis
                ))
                .with_param(param)
        })?;
        if let Some(name) = &run.summary_output {
            store::validate_name(name)?;
            if name == &run.output {
                return Err(
                    ServiceError::invalid_params("summary_output must differ from output").with_param("summary_output")
                );
            }
            if !run.overwrite && self.store.contains(name) {
                return Err(ServiceError::new(
                    ErrorKind::DatasetExists,
                    format!("a dataset named `{name}` exists already"),
                )
                .with_help("choose another summary_output name, drop the old dataset, or pass overwrite: true")
                .with_param("summary_output"));
            }
            refuse_writing_onto_input(run, name, "summary_output")?;
        }
        check_group_tolerance(run)?;
        self.check_roles(run, &entry.declaration)?;
        Ok(params)
    }

    /// Runs one analysis (once per group with `group_by`) and stores its output.
    pub fn run_analysis(&self, run: RunParams) -> ServiceResult<RunResult> {
        let title = format!("{} -> {}", run.analysis, run.output);
        let mut call = self.register_call(run.call_id.as_deref(), &title)?;
        let result = self.run_analysis_under(run, &call.control);
        call.finish(&result);
        result
    }

    /// [`Self::run_analysis`] under a control the caller owns (a pipeline shares one).
    fn run_analysis_under(&self, run: RunParams, control: &Arc<CallControl>) -> ServiceResult<RunResult> {
        let params = self.check_run(&run)?;
        let started = std::time::Instant::now();
        let PreparedInputs {
            tables: inputs,
            versions: input_versions,
        } = self.prepare_inputs(&run)?;
        let group_columns = group_columns(&run.group_by);
        let inputs_done = started.elapsed();

        let (table, run_summary, warnings) = self.run_groups(&run, &params, &inputs, &group_columns, control)?;
        drop(inputs);
        let analysis_done = started.elapsed();

        let plugin = self
            .host
            .plugin_of(&run.analysis)
            .expect("registered analysis has a plugin");
        let summary = run_summary.to_value();
        let provenance = |of_summary: bool| Provenance::Analysis {
            analysis: run.analysis.clone(),
            plugin: plugin.name.clone(),
            plugin_version: plugin.version.clone(),
            params: params.clone(),
            inputs: run.inputs.clone(),
            input_versions: input_versions.clone(),
            group_by: group_columns.clone(),
            group_tolerance: run.group_tolerance.clone().unwrap_or_default(),
            summary: of_summary,
            // The output keeps the summary as answered; the summary table holds it as rows.
            run_summary: if of_summary { Value::Null } else { summary.clone() },
            warnings: if of_summary { Vec::new() } else { warnings.clone() },
        };
        let summary_frame = match &run.summary_output {
            Some(_) => Some(summary_table(&run_summary, &group_columns)?),
            None => None,
        };
        // The output and its summary commit together: a crash never keeps one without the other.
        let mut writes = vec![store::NewDataset {
            name: run.output.clone(),
            frame: table,
            provenance: provenance(false),
            parquet_source: None,
        }];
        if let (Some(name), Some(frame)) = (&run.summary_output, summary_frame) {
            writes.push(store::NewDataset {
                name: name.clone(),
                frame,
                provenance: provenance(true),
                parquet_source: None,
            });
        }
        // A call stopped by its deadline or its client stores neither.
        let _commit = crate::bounded_calls::committing()?;
        let store_started = started.elapsed();
        let stored = self.store.insert_all(writes, run.overwrite)?;
        let store_done = started.elapsed();
        let summary_rows = stored.get(1).map(|summary_stored| summary_stored.frame.height());
        let answer = RunResult {
            output: run.output.clone(),
            rows: stored[0].frame.height(),
            columns: stored[0].manifest.columns.clone(),
            summary,
            warnings,
            summary_output: summary_rows.and(run.summary_output.clone()),
            summary_rows,
        };
        // Where a run's time goes, for the daemon benchmark and for a person tuning a lab's
        // workflow: fetching inputs, the plugin call, what lies between, storing the output.
        tracing::debug!(
            analysis = %run.analysis,
            inputs_ms = millis(inputs_done),
            analysis_ms = millis(analysis_done - inputs_done),
            prepare_ms = millis(store_started - analysis_done),
            store_ms = millis(store_done - store_started),
            answer_ms = millis(started.elapsed() - store_done),
            "analysis.run timings"
        );
        Ok(answer)
    }

    #[allow(clippy::type_complexity)]
    fn run_groups(
        &self,
        run: &RunParams,
        params: &Value,
        inputs: &[(String, DataFrame)],
        group_columns: &[String],
        control: &Arc<CallControl>,
    ) -> ServiceResult<(DataFrame, RunSummary, Vec<String>)> {
        let whole = control.span();
        if group_columns.is_empty() {
            control.enter(whole.part(0, 1, ""));
            let result = self
                .host
                .invoke(&run.analysis, params, inputs, control)
                .map_err(|f| invoke_error(&run.analysis, f))?;
            return Ok((result.table, RunSummary::Single(result.summary), result.warnings));
        }
        let (_, primary) = inputs
            .first()
            .ok_or_else(|| ServiceError::invalid_params("group_by needs at least one input table"))?;
        let tolerances = group_tolerances(run, group_columns);
        let groups = group_rows(primary, group_columns, &tolerances)?;
        // Exact values of a logged float column split it row by row: said when a group fails.
        let jittery = groups::looks_jittery(primary, group_columns, &tolerances, &groups);
        let mut combined: Option<DataFrame> = None;
        let mut group_summaries = Vec::with_capacity(groups.len());
        let mut warnings = Vec::new();
        let group_count = groups.len();
        // The other inputs that hold the group columns, read once for all the groups.
        let matchers: Vec<Option<groups::GroupMatcher>> = inputs
            .iter()
            .enumerate()
            .map(|(index, (_, frame))| {
                let has_keys = group_columns.iter().all(|c| frame.column(c).is_ok());
                (index > 0 && has_keys).then(|| groups::GroupMatcher::new(frame, group_columns, &tolerances))
            })
            .collect();
        for (group_index, group) in groups.iter().enumerate() {
            let (key, rows) = (&group.key, &group.rows);
            if control.cancelled.load(Ordering::Relaxed) {
                return Err(ServiceError::new(
                    ErrorKind::Cancelled,
                    format!("{}: cancelled by the client", run.analysis),
                ));
            }
            let label = group.label(group_columns);
            control.enter(whole.part(group_index, group_count, &format!("[{label}]")));
            let mut group_inputs = Vec::with_capacity(inputs.len());
            for (index, (role, frame)) in inputs.iter().enumerate() {
                let subset = if index == 0 {
                    frame.take(&IdxCa::from_vec(PlSmallStr::from_static("rows"), rows.clone()))
                } else if let Some(matcher) = &matchers[index] {
                    frame.take(&IdxCa::from_vec(
                        PlSmallStr::from_static("rows"),
                        matcher.rows_of(group),
                    ))
                } else {
                    Ok(frame.clone())
                }
                .map_err(|e| ServiceError::new(ErrorKind::InvalidData, e.to_string()))?;
                group_inputs.push((role.clone(), subset));
            }
            let result = self
                .host
                .invoke(&run.analysis, params, &group_inputs, control)
                .map_err(|f| {
                    let error = invoke_error(&format!("{} [{label}]", run.analysis), f);
                    match &jittery {
                        Some(column) if matches!(error.kind, ErrorKind::InvalidData | ErrorKind::NumericalFailure) => error.with_help(format!(
                            "group_by `{column}` made {group_count} groups of {} rows, most of them a single row: its values differ from row to row, as a logged reading does; give group_tolerance {{\"{column}\": T}}, T wider than the gaps between the values of one setpoint and narrower than the step between setpoints (0.5 for temperatures in K a few kelvin apart), so that each setpoint is one group",
                            primary.height()
                        )),
                        _ => error,
                    }
                })?;
            let mut table = result.table;
            for (position, (column, value)) in group_columns.iter().zip(key).enumerate() {
                if table.column(column).is_err() {
                    let constant = Series::from_any_values(
                        PlSmallStr::from_str(column),
                        &vec![value.clone(); table.height()],
                        true,
                    )
                    .map_err(|e| ServiceError::new(ErrorKind::PluginFailure, e.to_string()))?;
                    table
                        .insert_column(position, constant.into_column())
                        .map_err(|e| ServiceError::new(ErrorKind::PluginFailure, e.to_string()))?;
                }
            }
            warnings.extend(result.warnings.iter().map(|w| format!("[{label}] {w}")));
            let group_object: serde_json::Map<String, Value> = group_columns
                .iter()
                .zip(key)
                .map(|(c, v)| (c.clone(), cell_to_json(v.clone())))
                .collect();
            group_summaries.push(GroupSummary {
                group: group_object,
                summary: result.summary,
                warnings: result.warnings,
            });
            combined = Some(match combined {
                None => table,
                Some(mut all) => {
                    all.vstack_mut(&table).map_err(|e| {
                        ServiceError::new(
                            ErrorKind::PluginFailure,
                            format!("{}: group outputs differ in their columns: {e}", run.analysis),
                        )
                    })?;
                    all
                }
            });
        }
        let table = combined.ok_or_else(|| {
            ServiceError::new(
                ErrorKind::InvalidData,
                format!(
                    "{}: the first input table is empty; there is nothing to group",
                    run.analysis
                ),
            )
        })?;
        let summary = GroupedSummary {
            groups: group_summaries,
        };
        Ok((table, RunSummary::Grouped(summary), warnings))
    }

    /// Runs steps in order; a step may name an earlier step's output as an input. Every
    /// step is checked before the first one runs, as far as it can be without running the
    /// steps before it: its analysis, output names, input roles and parameters
    /// ([`Self::check_run`]), that each input is stored or made by an earlier step, and that
    /// no step writes onto a stored dataset the pipeline reads. What depends on an earlier
    /// step's output (its columns, the values in them) is checked when the step runs.
    pub fn run_pipeline(&self, pipeline: PipelineParams) -> ServiceResult<PipelineResult> {
        if pipeline.steps.is_empty() {
            return Err(ServiceError::invalid_params("the pipeline has no steps"));
        }
        let mut produced: Vec<&str> = Vec::new();
        // Stored datasets the steps read (not made by an earlier step), with the first reader.
        let mut read_from_store: Vec<(&str, usize, &str)> = Vec::new();
        for (index, step) in pipeline.steps.iter().enumerate() {
            let context = |e: ServiceError| ServiceError {
                message: format!(
                    "pipeline refused before any step ran: step {} ({}): {}",
                    index + 1,
                    step.analysis,
                    e.message
                ),
                ..e
            };
            if !self.host.analyses.contains_key(&step.analysis) {
                return Err(context(self.unknown_analysis(&step.analysis)));
            }
            if step.call_id.is_some() {
                return Err(context(
                    ServiceError::invalid_params("a pipeline step cannot carry its own call_id")
                        .with_help("give call_id to pipeline.run; it cancels and reports the whole pipeline"),
                ));
            }
            self.check_run(step).map_err(context)?;
            for (role, dataset) in &step.inputs {
                if produced.contains(&dataset.as_str()) {
                    continue;
                }
                if !self.store.contains(dataset) {
                    return Err(context(ServiceError::unknown_dataset(dataset)));
                }
                read_from_store.push((dataset, index, role));
            }
            let outputs = std::iter::once((step.output.as_str(), "output"))
                .chain(step.summary_output.as_deref().map(|name| (name, "summary_output")));
            for (name, param) in outputs {
                if let Some(&(_, reader, role)) = read_from_store.iter().find(|(dataset, _, _)| *dataset == name) {
                    return Err(context(
                        ServiceError::invalid_params(format!(
                            "{param} `{name}` is the stored dataset step {} ({}) reads as input `{role}`: choose another {param} name for this step (storing there would replace data the pipeline reads)",
                            reader + 1,
                            pipeline.steps[reader].analysis
                        ))
                        .with_help(format!("`{name}` stays as stored"))
                        .with_param(param),
                    ));
                }
            }
            if let Some(summary) = &step.summary_output {
                produced.push(summary);
            }
            if produced.contains(&step.output.as_str()) {
                return Err(context(ServiceError::invalid_params(format!(
                    "output `{}` is produced by an earlier step",
                    step.output
                ))));
            }
            produced.push(&step.output);
        }
        let title = format!("pipeline of {} steps", pipeline.steps.len());
        let mut call = self.register_call(pipeline.call_id.as_deref(), &title)?;
        let result = self.run_steps(pipeline.steps, &call.control);
        call.finish(&result);
        result
    }

    fn run_steps(&self, steps: Vec<RunParams>, control: &Arc<CallControl>) -> ServiceResult<PipelineResult> {
        let whole = control.span();
        let count = steps.len();
        let mut results = Vec::with_capacity(count);
        for (index, step) in steps.into_iter().enumerate() {
            let analysis = step.analysis.clone();
            if control.cancelled.load(Ordering::Relaxed) {
                return Err(ServiceError::new(
                    ErrorKind::Cancelled,
                    format!(
                        "pipeline cancelled by the client before step {} ({analysis})",
                        index + 1
                    ),
                ));
            }
            control.enter(whole.part(index, count, &format!("step {} of {count} ({analysis})", index + 1)));
            let result = self.run_analysis_under(step, control).map_err(|e| {
                let done: Vec<String> = results.iter().map(|r: &RunResult| r.output.clone()).collect();
                ServiceError {
                    message: format!("step {} ({analysis}): {}", index + 1, e.message),
                    help: Some(match &e.help {
                        Some(help) => format!("{help}; steps before it stored: {}", done.join(", ")),
                        None => format!(
                            "steps before it stored: {}",
                            if done.is_empty() {
                                "none".into()
                            } else {
                                done.join(", ")
                            }
                        ),
                    }),
                    ..e
                }
            })?;
            results.push(result);
        }
        Ok(PipelineResult { steps: results })
    }
}

#[cfg(test)]
impl Service {
    /// A service with no plugins over the (empty) workspace `workspace`, which is also its
    /// one data root: what the daemon's own unit tests call.
    pub(crate) fn without_plugins(workspace: &Path) -> Service {
        Service::new(
            DatasetStore::open(workspace).unwrap(),
            PluginHost::default(),
            DataRoots::new([workspace.to_owned()]),
            workspace.to_owned(),
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    // A spreadsheet column left empty (a 2D sheet's thickness) imports as text with no value;
    // it is the declared type's nulls. A column with text in it is refused with what to give.
    #[test]
    fn an_empty_column_is_nulls_of_the_declared_type_and_a_mistyped_one_says_what_to_give() {
        let spec = ColumnSpec::new("thickness_m", ColumnType::F64, Some("m"), "thickness");
        let mut frame = DataFrame::new(1, vec![Column::new("thickness_m".into(), [None::<&str>])]).unwrap();
        conform_column(&mut frame, &spec, "samples", "sheet").unwrap();
        let column = frame.column("thickness_m").unwrap();
        assert_eq!(column.dtype(), &DataType::Float64);
        assert_eq!(column.null_count(), 1);
        let mut frame = DataFrame::new(1, vec![Column::new("thickness_m".into(), ["thin"])]).unwrap();
        let error = conform_column(&mut frame, &spec, "samples", "sheet").unwrap_err();
        assert!(
            error.message.contains("column `thickness_m` of input `samples`"),
            "{}",
            error.message
        );
        let help = error.help.unwrap_or_default();
        assert!(help.contains("give `thickness_m` numbers (SI unit m)"), "{help}");
    }

    #[test]
    fn an_import_with_a_call_id_reports_its_progress_and_its_end() {
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::without_plugins(workspace.path());
        let mut events = service.progress_hub.subscribe("import-1");
        let params: ImportParams = serde_json::from_value(json!({
            "name": "t", "columns": {"temperature_K": [10.0, 20.0]}, "call_id": "import-1",
        }))
        .unwrap();
        let answer = service.dataset_import(params).unwrap();
        assert_eq!(answer.rows, 2);
        let mut kinds = Vec::new();
        while let Ok(event) = events.try_recv() {
            kinds.push(event["kind"].as_str().unwrap().to_owned());
            if event["kind"] == "end" {
                assert_eq!(event["outcome"], json!("done"));
            }
        }
        assert_eq!(kinds.first().map(String::as_str), Some("begin"), "{kinds:?}");
        assert!(kinds.iter().any(|k| k == "report"), "{kinds:?}");
        assert_eq!(kinds.last().map(String::as_str), Some("end"), "{kinds:?}");
        // The id is free again once the import has ended.
        assert!(!service.progress("import-1").running);
    }

    #[test]
    fn each_plugin_status_maps_to_its_error_kind_and_code() {
        let cases = [
            (abi::STATUS_INVALID_INPUT, ErrorKind::InvalidData, 4007),
            (abi::STATUS_NUMERICAL_FAILURE, ErrorKind::NumericalFailure, 5002),
            (abi::STATUS_CANCELLED, ErrorKind::Cancelled, 5003),
            (abi::STATUS_UNKNOWN_ANALYSIS, ErrorKind::UnknownAnalysis, 4003),
            (-12345, ErrorKind::PluginFailure, 5001),
        ];
        for (status, kind, code) in cases {
            let error = invoke_error(
                "hall.reduce",
                InvokeFailure {
                    status,
                    message: "thickness_m must be positive".into(),
                },
            );
            assert_eq!(error.kind, kind, "status {status}");
            assert_eq!(error.kind.code(), code, "status {status}");
            // The message names the analysis and keeps the plugin's words on what to change.
            assert_eq!(error.message, "hall.reduce: thickness_m must be positive");
            assert_eq!(error.data()["kind"], json!(kind.name()));
        }
    }

    #[test]
    fn a_plugin_bug_says_the_daemon_is_unaffected() {
        let error = invoke_error(
            "x.y",
            InvokeFailure {
                status: -1,
                message: "panicked".into(),
            },
        );
        assert!(error.help.as_deref().unwrap().contains("bug in the plugin"));
        let data = invoke_error(
            "x.y",
            InvokeFailure {
                status: abi::STATUS_INVALID_INPUT,
                message: "bad".into(),
            },
        );
        assert_eq!(data.help, None);
    }

    #[test]
    fn an_unknown_analysis_is_refused_before_any_input_is_read() {
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::without_plugins(workspace.path());
        let run: RunParams = serde_json::from_value(json!({
            "analysis": "hall.reduse", "inputs": {"readings": "absent"}, "output": "out",
        }))
        .unwrap();
        let error = service.run_analysis(run).unwrap_err();
        assert_eq!(error.kind, ErrorKind::UnknownAnalysis);
        assert_eq!(error.message, "no analysis named `hall.reduse`");
        assert_eq!(error.param.as_deref(), Some("analysis"));
        assert_eq!(error.help.as_deref(), Some("loaded analyses: none"));
        let error = service.analysis_describe("hall.reduse").unwrap_err();
        assert_eq!(error.kind, ErrorKind::UnknownAnalysis);
    }

    #[test]
    fn a_taken_output_name_is_refused_with_the_way_out() {
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::without_plugins(workspace.path());
        let import: ImportParams =
            serde_json::from_value(json!({"name": "out", "columns": {"temperature_K": [10.0]}})).unwrap();
        service.dataset_import(import).unwrap();
        let run: RunParams = serde_json::from_value(json!({
            "analysis": "hall.reduce", "inputs": {"readings": "out"}, "output": "out",
        }))
        .unwrap();
        let error = service.run_analysis(run).unwrap_err();
        assert_eq!(error.kind, ErrorKind::DatasetExists);
        assert_eq!(error.kind.code(), 4005);
        assert_eq!(error.param.as_deref(), Some("output"));
        assert!(error.help.as_deref().unwrap().contains("overwrite: true"));
    }

    #[test]
    fn dataset_calls_go_to_the_store() {
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::without_plugins(workspace.path());
        let error = service.dataset_info("nothing").unwrap_err();
        assert_eq!(error.kind, ErrorKind::UnknownDataset);
        assert_eq!(error.kind.code(), 4002);
        assert!(error.help.as_deref().unwrap().contains("dataset.import"));
        let import: ImportParams =
            serde_json::from_value(json!({"name": "t", "columns": {"temperature_K": [10.0, 20.0]}})).unwrap();
        service.dataset_import(import).unwrap();
        assert_eq!(service.dataset_info("t").unwrap().rows, 2);
        service.dataset_drop("t").unwrap();
        assert_eq!(service.dataset_info("t").unwrap_err().kind, ErrorKind::UnknownDataset);
    }

    #[test]
    fn a_finished_call_reports_its_outcome() {
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::without_plugins(workspace.path());
        let mut call = service.register_call(Some("c-1"), "test").unwrap();
        // A second call may not take a running call's id.
        assert!(service.register_call(Some("c-1"), "test").is_err());
        call.finish::<()>(&Err(ServiceError::new(ErrorKind::Cancelled, "stopped")));
        assert_eq!(call.outcome, Some((Outcome::Cancelled, Some("stopped".to_owned()))));
        call.finish::<()>(&Err(ServiceError::invalid_params("bad")));
        assert_eq!(call.outcome, Some((Outcome::Failed, Some("bad".to_owned()))));
        call.finish(&Ok(()));
        assert_eq!(call.outcome, Some((Outcome::Done, None)));
        drop(call);
        assert!(service.register_call(Some("c-1"), "test").is_ok());
    }
}
