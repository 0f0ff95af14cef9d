//! The params object of every JSON-RPC method, by name. The doc comments are the
//! descriptions `rpc.discover` shows, and the daemon checks a request against the schema
//! derived from these types before it reads it.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use serde_json::{Map, Value};
use std::collections::BTreeMap;

/// No parameters.
#[derive(Debug, Clone, Default, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct NoParams {}

/// Names one dataset.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct DatasetName {
    /// dataset name
    pub name: String,
}

/// Names one analysis.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct AnalysisName {
    /// analysis name, for example hall.reduce
    pub analysis: String,
}

/// Names one sample.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SampleName {
    /// the sample's name, as in the `sample` column
    pub sample: String,
}

/// Optionally names one dataset.
#[derive(Debug, Clone, Default, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct DatasetFilter {
    /// dataset name
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub dataset: Option<String>,
}

/// Names a running (or recently ended) call.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CallId {
    /// the call_id given to the call (analysis.run, pipeline.run, dataset.import)
    pub call_id: String,
}

/// A table file format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum TableFormat {
    Csv,
    Parquet,
    Ipc,
}

impl TableFormat {
    /// The name on the wire.
    pub fn name(self) -> &'static str {
        match self {
            TableFormat::Csv => "csv",
            TableFormat::Parquet => "parquet",
            TableFormat::Ipc => "ipc",
        }
    }
}

/// The unit of one imported column: a unit name, or a unit with an explicit new column name.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(untagged)]
pub enum UnitSpec {
    Unit(String),
    Renamed { unit: String, to: String },
}

impl UnitSpec {
    /// The unit's name, whichever form gave it.
    pub fn unit(&self) -> &str {
        match self {
            UnitSpec::Unit(unit) | UnitSpec::Renamed { unit, .. } => unit,
        }
    }
}

/// How a CSV file is written. Every member is optional; the defaults read a plain
/// comma-separated file with a header line.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CsvDialect {
    /// one character between fields (`","`, `";"`, `"\t"` or `"tab"`, `"|"`)
    #[serde(default = "default_separator")]
    pub separator: String,
    /// numbers are written with a decimal comma (`1,5`); needs a separator other than `,`
    #[serde(default)]
    pub decimal_comma: bool,
    /// lines starting with this text (after leading blanks) are comments, anywhere in the file
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub comment_prefix: Option<String>,
    /// lines to skip at the top of the file, before the header
    #[serde(default)]
    pub skip_rows: u32,
    /// whether the first row names the columns; without one they are column_1, column_2, ...
    #[serde(default = "yes")]
    pub header: bool,
    /// texts that mean a missing value in this file, e.g. ["n/a", "--"]: an unquoted data
    /// cell that is exactly one of them (after trimming blanks) is read as missing, as an
    /// empty cell always is
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub null_values: Vec<String>,
}

fn default_separator() -> String {
    ",".into()
}

fn yes() -> bool {
    true
}

impl Default for CsvDialect {
    fn default() -> Self {
        CsvDialect {
            separator: default_separator(),
            decimal_comma: false,
            comment_prefix: None,
            skip_rows: 0,
            header: true,
            null_values: Vec::new(),
        }
    }
}

/// `dataset.import`: a file inside the data roots, or a table sent inline.
#[derive(Debug, Clone, Default, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ImportParams {
    /// dataset name: letters, digits, _ - ., no path separators
    pub name: String,
    /// file to read; relative paths resolve against the first data root
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub path: Option<String>,
    /// inline table {column: [values]}
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub columns: Option<Map<String, Value>>,
    /// file format; default from the file name
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub format: Option<TableFormat>,
    /// {"source name": "new_name"}: rename any column (text ones too); applied first
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub rename: BTreeMap<String, String>,
    /// {column: unit} or {column: {unit, to}}, columns named after rename: convert into SI
    /// and rename by the quantity_unit convention
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub units: BTreeMap<String, UnitSpec>,
    /// CSV dialect: separator, decimal_comma, comment_prefix, skip_rows (lines before the
    /// header), header, null_values (texts read as missing values); rows with another number of fields than the header are errors
    /// naming their line
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub csv: Option<CsvDialect>,
    /// replace an existing dataset of that name
    #[serde(default, skip_serializing_if = "is_false")]
    pub overwrite: bool,
    /// client-chosen id, unique among running calls: the token of the import's progress
    /// (progress.subscribe, analysis.progress; stages reading, parsing, converting units,
    /// storing) and the handle to cancel it between stages (analysis.cancel)
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub call_id: Option<String>,
}

fn is_false(value: &bool) -> bool {
    !*value
}

/// The units a table is written in.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum ExportUnits {
    // As stored: SI, with the SI unit in each column's name.
    #[default]
    Si,
    // The customary units of the trade, named in each column's name.
    Customary,
}

impl ExportUnits {
    /// The name on the wire.
    pub fn name(self) -> &'static str {
        match self {
            ExportUnits::Si => "si",
            ExportUnits::Customary => "customary",
        }
    }
}

/// `dataset.export`: a stored dataset written to a file.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ExportParams {
    /// dataset name
    pub name: String,
    /// file to write; its directory must exist inside a data root
    pub path: String,
    /// file format; default from the file name
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub format: Option<TableFormat>,
    /// si: as stored; customary: densities in cm^-3 and cm^-2, mobilities in cm^2/(V s),
    /// resistivities in ohm cm, lengths in um, each column renamed after its unit
    /// (density_m3 -> density_cm3)
    #[serde(default)]
    pub units: ExportUnits,
    /// replace an existing file at path; without it an existing file is left as it is and
    /// the call fails. The file is written under a temporary name and renamed into place,
    /// so it is never seen half-written
    #[serde(default, skip_serializing_if = "is_false")]
    pub overwrite: bool,
}

/// The largest `dataset.rows` page.
pub const MAX_ROWS_PER_CALL: usize = 100_000;
/// Datasets per `dataset.list` page unless the caller says otherwise.
pub const DEFAULT_LIST_PAGE: usize = 200;
/// The largest `dataset.list` page: a page stays small on the wire (a few hundred kB at
/// most) however many datasets the workspace holds.
pub const MAX_LIST_PAGE: usize = 5000;

/// `dataset.rows`: a page of a dataset's rows.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RowsParams {
    /// dataset name
    pub name: String,
    /// first row
    #[serde(default)]
    pub offset: usize,
    /// number of rows (default 1000)
    #[serde(default, skip_serializing_if = "Option::is_none")]
    #[schemars(range(max = 100_000))]
    pub limit: Option<usize>,
}

/// `dataset.list`: datasets in name order from `offset`, at most `limit` of them,
/// optionally only names that start with `prefix`.
#[derive(Debug, Clone, Default, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ListParams {
    /// first dataset of the page, counted in name order among the matches
    #[serde(default)]
    pub offset: usize,
    /// datasets per page, at most 5000 (default 200)
    #[serde(default, skip_serializing_if = "Option::is_none")]
    #[schemars(range(max = 5000))]
    pub limit: Option<usize>,
    /// only datasets whose name starts with this text
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub prefix: Option<String>,
}

/// One column name or several.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(untagged)]
pub enum GroupBy {
    One(String),
    Many(Vec<String>),
}

impl GroupBy {
    /// The column names, one or several.
    pub fn columns(&self) -> Vec<String> {
        match self {
            GroupBy::One(name) => vec![name.clone()],
            GroupBy::Many(names) => names.clone(),
        }
    }
}

/// `analysis.run`, and one step of `pipeline.run`.
#[derive(Debug, Clone, Default, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RunParams {
    /// analysis name
    pub analysis: String,
    /// {role: dataset}
    pub inputs: BTreeMap<String, String>,
    /// the analysis's parameters (see analysis.describe, and x-analyses in rpc.discover)
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub params: Option<Map<String, Value>>,
    /// name of the dataset to store the output table in; never one of `inputs` (nor, in a
    /// pipeline, a stored dataset any step reads)
    pub output: String,
    /// column(s) of the first input to group by
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub group_by: Option<GroupBy>,
    /// for numeric group_by columns, the widest gap between sorted values that stays within
    /// one group, by column name: {"temperature_K": 0.5} keeps a logged temperature that
    /// jitters around its setpoint in one group per setpoint (keyed by the group's mean);
    /// a column not named here groups by exact values
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub group_tolerance: Option<BTreeMap<String, f64>>,
    /// replace an existing output dataset (never an input of the call)
    #[serde(default, skip_serializing_if = "is_false")]
    pub overwrite: bool,
    /// client-chosen id, unique among running calls: the token of its progress
    /// (progress.subscribe, analysis.progress) and the handle to cancel it (analysis.cancel)
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub call_id: Option<String>,
    /// also store the summary as a dataset: one row per group, one column per scalar value;
    /// never one of `inputs`
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub summary_output: Option<String>,
}

/// `pipeline.run`: analysis.run steps in order.
#[derive(Debug, Clone, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PipelineParams {
    /// analysis.run parameter objects, without call_id
    #[schemars(length(min = 1))]
    pub steps: Vec<RunParams>,
    /// client-chosen id of the whole pipeline: its progress token and the handle to cancel it
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub call_id: Option<String>,
}

/// Which renderings of a figure to return.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
pub enum FigureFormat {
    #[serde(rename = "svg")]
    Svg,
    #[serde(rename = "vega-lite")]
    VegaLite,
    #[default]
    #[serde(rename = "both")]
    Both,
}

/// A value a row filter compares a column with.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(untagged)]
pub enum FilterValue {
    Text(String),
    Number(f64),
    Flag(bool),
}

/// `plot.render`. Open: further figure options pass on to the plotting code, which checks them.
#[derive(Debug, Clone, Default, Serialize, Deserialize, JsonSchema)]
pub struct PlotParams {
    /// dataset name
    pub dataset: String,
    /// a kind from plot.kinds; default: the first kind for the analysis that made the
    /// dataset, else `columns`
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind: Option<String>,
    /// keep rows whose columns equal these values, for example {"sample": "W1"}
    /// (temperature_K and field_T within their setpoint's tolerance); the title names them
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub filter: Option<BTreeMap<String, FilterValue>>,
    /// which renderings to return
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub format: Option<FigureFormat>,
    /// x column, for kind `columns`
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub x: Option<String>,
    /// y column(s), for kind `columns`
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub y: Option<Vec<String>>,
    /// 1-sigma uncertainty column per y column, for kind `columns`
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub y_error: Option<Vec<String>>,
    /// columns whose value combinations become separate series; temperature_K and field_T by
    /// their nominal values (0.4997 and 0.5002 T are one series, 0.5 T). Default: the
    /// kind's choice
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub series_by: Option<Vec<String>>,
    /// override the kind's choice of a logarithmic x axis
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub log_x: Option<bool>,
    /// override the kind's choice of a logarithmic y axis
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub log_y: Option<bool>,
    /// figure title
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub title: Option<String>,
    /// width in pixels
    #[serde(default, skip_serializing_if = "Option::is_none")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub width: Option<f64>,
    /// height in pixels
    #[serde(default, skip_serializing_if = "Option::is_none")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub height: Option<f64>,
    /// draw as if the dataset came from this analysis (default: its provenance)
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub analysis: Option<String>,
    /// further figure options, passed on as given
    #[serde(flatten)]
    pub more: Map<String, Value>,
}
