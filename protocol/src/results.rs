//! The result of every JSON-RPC method. Members that depend on a plugin (an analysis's
//! declaration, its summary, a dataset's provenance) stay JSON values: the protocol
//! carries them, the plugin defines them.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use serde_json::{Map, Value};

/// The plugin ABI version the daemon speaks.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct AbiVersion {
    pub major: u32,
    pub minor: u32,
}

/// A plugin as `server.info` lists it.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct LoadedPlugin {
    pub name: String,
    pub version: String,
    /// `in_process` or `isolated`
    pub isolation: String,
}

/// A plugin library the daemon did not load, and why.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct RefusedPlugin {
    pub file: String,
    pub reason: String,
}

/// A workspace file the daemon could not read at start, and why.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct DamagedFile {
    pub file: String,
    pub reason: String,
}

/// Memory held by the stored tables, against the daemon's budget.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct MemoryUse {
    pub stored_bytes: u64,
    pub budget_bytes: u64,
}

/// `server.info`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct ServerInfo {
    pub name: String,
    pub version: String,
    pub abi: AbiVersion,
    pub workspace: String,
    pub data_roots: Vec<String>,
    pub plugins: Vec<LoadedPlugin>,
    pub refused_plugins: Vec<RefusedPlugin>,
    pub damaged_files: Vec<DamagedFile>,
    pub memory: MemoryUse,
}

/// One plugin of `plugin.list`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct PluginEntry {
    pub name: String,
    pub version: String,
    pub abi_minor: u32,
    /// the library file it was loaded from
    pub library: String,
    pub features: Vec<String>,
    pub analyses: Vec<String>,
    /// `in_process`: in the daemon's process; `isolated`: in supervised worker processes,
    /// where a crash, exit or hang fails one call with 5001
    pub isolation: String,
}

/// One analysis of `analysis.list`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct AnalysisEntry {
    pub name: String,
    pub plugin: String,
    pub summary: String,
}

/// A stored column: its name and its type.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
pub struct ColumnInfo {
    pub name: String,
    pub dtype: String,
}

/// A stored dataset's name, size and columns (`dataset.import`).
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct DatasetSummary {
    pub name: String,
    pub rows: usize,
    pub columns: Vec<ColumnInfo>,
    /// things the import noticed but did not refuse: text columns that look like numbers
    /// with a decimal comma, mostly numeric columns that some cells made text (the first
    /// few with their lines in the file), NaN or infinities in float columns, columns
    /// without any value (stored as numbers, all missing)
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub notes: Vec<String>,
}

/// `dataset.info`: a dataset's summary, creation time and provenance.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct DatasetInfo {
    pub name: String,
    pub rows: usize,
    pub columns: Vec<ColumnInfo>,
    /// UTC, RFC 3339
    pub created: String,
    /// the identity of this stored table, 32 hex digits: new each time a table is stored
    /// under the name (import, analysis output, overwrite), never reused; absent for datasets
    /// stored before versions were kept
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub version: Option<String>,
    /// where the dataset came from: a file, inline columns, or an analysis run (then with
    /// its parameters, its inputs by name and, as input_versions, the version of each input
    /// it read, its run_summary and warnings)
    pub provenance: Value,
}

/// One dataset of a `dataset.list` page.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct DatasetEntry {
    pub name: String,
    pub rows: usize,
    pub column_count: usize,
}

/// `dataset.list`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct DatasetPage {
    /// datasets matching prefix, over all pages
    pub total: usize,
    pub offset: usize,
    pub datasets: Vec<DatasetEntry>,
}

/// `dataset.drop`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct Dropped {
    pub dropped: String,
}

/// `dataset.export`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct Exported {
    pub name: String,
    /// the file written, resolved
    pub path: String,
    pub format: String,
    pub rows: usize,
    pub units: String,
    pub columns: Vec<String>,
}

/// `dataset.rows`: a page of rows as columns of JSON values (SI units; NaN as null).
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct RowsPage {
    pub total_rows: usize,
    #[serde(default)]
    pub offset: usize,
    pub columns: Map<String, Value>,
}

/// `analysis.run`, and each step of `pipeline.run`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct RunResult {
    pub output: String,
    pub rows: usize,
    #[serde(default)]
    pub columns: Vec<ColumnInfo>,
    /// the analysis's summary; with group_by, {groups: [{group, summary, warnings}]}
    #[schemars(with = "RunSummary")]
    pub summary: Value,
    pub warnings: Vec<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub summary_output: Option<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub summary_rows: Option<usize>,
}

/// The shapes a run's summary takes, for its schema only: the daemon passes the plugin's
/// summary through as JSON, and groups it as a `GroupedSummary` when the run has group_by.
#[derive(JsonSchema)]
#[serde(untagged)]
#[allow(dead_code)]
enum RunSummary {
    Grouped(GroupedSummary),
    Single(Map<String, Value>),
}

/// The summary of an `analysis.run` with group_by: one entry per group of the first input,
/// in the order the groups first appear.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct GroupedSummary {
    pub groups: Vec<GroupSummary>,
}

/// One group of a grouped run's summary.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct GroupSummary {
    /// the group's value in each group_by column, by column name
    pub group: Map<String, Value>,
    /// the analysis's summary of this group's rows
    pub summary: Value,
    /// this group's warnings as the analysis gave them (the run's warnings repeat them,
    /// each prefixed with its group)
    pub warnings: Vec<String>,
}

/// `pipeline.run`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct PipelineResult {
    pub steps: Vec<RunResult>,
}

/// `analysis.cancel`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct CancelResult {
    pub call_id: String,
    pub cancelled: bool,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reason: Option<String>,
}

/// `analysis.progress`: the progress last reported by a running call.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct ProgressState {
    pub call_id: String,
    pub running: bool,
    /// 0 to 1
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fraction: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub message: Option<String>,
}

/// `plot.render`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct Figure {
    pub dataset: String,
    pub kind: String,
    pub title: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub svg: Option<String>,
    /// a Vega-Lite v5 specification
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub vega_lite: Option<Value>,
}

/// The plugin that serves an analysis, as `analysis.describe` names it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct PluginIdentity {
    pub name: String,
    pub version: String,
}

/// `analysis.describe`: the analysis's declaration as its plugin made it (name, summary,
/// params schema, input roles, output columns, summary keys, figures), and its plugin.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct AnalysisDescription {
    /// the declaration's members, as the plugin defines them
    #[serde(flatten)]
    pub declaration: Map<String, Value>,
    /// the plugin that serves the analysis
    pub plugin: PluginIdentity,
}

/// One figure kind of `plot.kinds`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct PlotKind {
    pub name: String,
    pub description: String,
    /// the analyses whose outputs it draws
    pub analyses: Vec<String>,
}

/// One sample of `report.samples`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct ReportSample {
    pub sample: String,
    pub datasets: Vec<String>,
}

/// `report.render`.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
pub struct Report {
    pub sample: String,
    pub datasets: Vec<String>,
    pub figures: usize,
    /// the self-contained page
    pub html: String,
}

/// A progress subscription's id.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(untagged)]
pub enum SubscriptionId {
    Number(u64),
    Text(String),
}
