//! The Rust SDK for plugin authors: one typed function per analysis, the C side written
//! by [`export_plugin!`](crate::export_plugin).
//!
//! ```text
//! struct Reduce;
//! impl mobilis_sdk::sdk::Analysis for Reduce {
//!     const NAME: &'static str = "example.reduce";
//!     type Params = MyParams; // serde::Deserialize
//!     fn declaration() -> AnalysisDeclaration { ... }
//!     fn run(params: MyParams, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> { ... }
//! }
//! mobilis_sdk::export_plugin!(name: "example", analyses: [Reduce]);
//! ```
//!
//! # One contract per analysis
//!
//! The parameters are one typed struct: [`Analysis::Params`] derives both its
//! deserialisation (serde) and its JSON Schema (schemars), so a parameter's name, type,
//! default, bounds and description are written once, on the field. The SDK puts the
//! derived schema ([`params_schema`]) in the declaration; the host validates calls against
//! it. Choice parameters are Rust enums, so an unknown choice is refused by the host with
//! the list of choices before the plugin runs.
//!
//! The output goes through an [`OutputBuilder`] made from the declaration: a column or a
//! summary key the declaration does not name, a wrong dtype or a missing required column
//! is a "plugin bug" error, never a silent surprise for a client. A declared `f64` summary
//! key `x` implies its standard uncertainty `x_unc` and the parts of its budget
//! `x_unc_stat`, `x_unc_sys`, ... (same unit): companions are not declared one by one (see
//! [`AnalysisDeclaration::summary_key`]). The host checks every
//! output against the declaration again ([`check_output`]), so a plugin written without
//! this SDK is held to the same contract.
//!
//! **Architecture Invariant.** A panic never crosses the boundary: every exported function
//! runs its body under `catch_unwind` and turns a panic into [`abi::STATUS_PANIC`] with the
//! panic message. This catch is the only one there is: unwinding out of an `extern "C"`
//! function aborts the process, so the host cannot catch a plugin's panic for it. Plugins
//! therefore must not be built with `panic = "abort"`, and [`export_plugin!`](crate::export_plugin)
//! refuses to compile in such a build.

use crate::abi::{
    self, AnalysisDeclaration, ColumnType, ContractViolation, HostContext, InputTable, InvokeOutput, PluginDeclaration,
};
use crate::table_ffi;
use polars::prelude::StringChunked;
use polars::prelude::{Column, DataFrame, DataType, Float64Chunked, IntoColumn, NamedFrom, PlSmallStr, Series};
use polars_arrow::array::MutableBinaryViewArray;
use polars_arrow::bitmap::Bitmap;
use serde::de::DeserializeOwned;
use serde_json::{Map, Value};
use std::any::TypeId;
use std::collections::HashMap;
use std::ffi::{CStr, CString};
use std::os::raw::c_char;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::{Arc, Mutex, OnceLock};

/// How an analysis fails. The message says what the caller should change.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum AnalysisError {
    /// Parameters or input data are unusable.
    #[error("{0}")]
    InvalidInput(String),
    /// Valid input, but the computation failed (no convergence, singular system, ...).
    #[error("{0}")]
    Numerical(String),
    /// The host asked to stop.
    #[error("cancelled by the client")]
    Cancelled,
    /// The plugin broke its own contract (for example an undeclared output column): a bug
    /// to fix in the plugin, reported like a panic.
    #[error("plugin bug: {0}")]
    Bug(String),
}

impl AnalysisError {
    fn status(&self) -> i32 {
        match self {
            AnalysisError::InvalidInput(_) => abi::STATUS_INVALID_INPUT,
            AnalysisError::Numerical(_) => abi::STATUS_NUMERICAL_FAILURE,
            AnalysisError::Cancelled => abi::STATUS_CANCELLED,
            AnalysisError::Bug(_) => abi::STATUS_PANIC,
        }
    }
}

/// What an analysis returns: one table, summary numbers and warnings for the client.
#[derive(Debug, Clone)]
pub struct AnalysisOutput {
    pub table: DataFrame,
    /// A JSON object; its keys are declared in [`AnalysisDeclaration::summary_keys`].
    pub summary: serde_json::Map<String, serde_json::Value>,
    pub warnings: Vec<String>,
}

impl AnalysisOutput {
    pub fn new(table: DataFrame) -> Self {
        AnalysisOutput {
            table,
            summary: serde_json::Map::new(),
            warnings: Vec::new(),
        }
    }
}

/// The input tables of one call, by role.
pub struct Inputs {
    tables: Vec<(String, DataFrame)>,
}

impl Inputs {
    /// Builds inputs directly, for testing an analysis without a host.
    pub fn from_tables(tables: impl IntoIterator<Item = (String, DataFrame)>) -> Self {
        Inputs {
            tables: tables.into_iter().collect(),
        }
    }

    /// The table of a role, if the caller supplied one.
    pub fn optional(&self, role: &str) -> Option<&DataFrame> {
        self.tables
            .iter()
            .find(|(name, _)| name == role)
            .map(|(_, table)| table)
    }

    /// The table of a required role. The host checks required roles before calling, so
    /// this fails only when an analysis is run without a host.
    pub fn required(&self, role: &str) -> Result<&DataFrame, AnalysisError> {
        self.optional(role).ok_or_else(|| {
            AnalysisError::InvalidInput(format!("input role `{role}` is missing; pass a dataset for it"))
        })
    }
}

/// The host's services, as seen by an analysis.
pub struct Host<'a> {
    context: Option<&'a HostContext>,
}

impl<'a> Host<'a> {
    /// A host that reports nowhere and never cancels, for tests and benchmarks.
    pub fn detached() -> Host<'static> {
        Host { context: None }
    }

    /// Reports progress, `fraction` in [0, 1].
    pub fn progress(&self, fraction: f64, message: &str) {
        let Some(context) = self.context else { return };
        let Some(report) = context.report_progress else { return };
        let message = c_string_lossy(message);
        // SAFETY: the host guarantees the context and its callbacks are valid during invoke.
        unsafe { report(context.host_data, fraction.clamp(0.0, 1.0), message.as_ptr()) };
    }

    /// True once the client asked to cancel.
    pub fn is_cancelled(&self) -> bool {
        let Some(context) = self.context else { return false };
        let Some(check) = context.is_cancelled else {
            return false;
        };
        // SAFETY: as in `progress`.
        unsafe { check(context.host_data) != 0 }
    }

    /// `Err(Cancelled)` once the client asked to cancel; use with `?` in long loops.
    pub fn check_cancelled(&self) -> Result<(), AnalysisError> {
        if self.is_cancelled() {
            Err(AnalysisError::Cancelled)
        } else {
            Ok(())
        }
    }
}

/// One analysis, written by a plugin author.
pub trait Analysis: 'static {
    /// The analysis name, `plugin.analysis` by convention.
    const NAME: &'static str;
    /// The parameters, deserialised from the call's JSON (the host has already checked
    /// them against the schema derived from this type, see [`params_schema`]). Doc
    /// comments become descriptions, serde defaults become `default`, and bounds are
    /// written as `#[schemars(range(min = ..))]` or
    /// `#[schemars(extend("exclusiveMinimum" = ..))]` on the field.
    type Params: DeserializeOwned + schemars::JsonSchema;
    /// The declaration: summary, input roles, output columns and summary keys. Its `name`
    /// is overwritten with [`Analysis::NAME`] and its `params` with the schema derived from
    /// [`Analysis::Params`].
    fn declaration() -> AnalysisDeclaration;
    fn run(params: Self::Params, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError>;
}

/// An analysis with its types erased, as the export macro stores it.
pub struct Registration {
    pub name: &'static str,
    pub declaration: fn() -> AnalysisDeclaration,
    pub run: fn(&str, &Inputs, &Host) -> Result<AnalysisOutput, AnalysisError>,
}

/// The registration of one analysis (used by [`export_plugin!`](crate::export_plugin)).
pub const fn registration<A: Analysis>() -> Registration {
    Registration {
        name: A::NAME,
        declaration: declaration_of::<A>,
        run: run_params::<A>,
    }
}

/// The complete declaration of an analysis, as the plugin sends it to the host.
pub fn declaration_of<A: Analysis>() -> AnalysisDeclaration {
    let mut declaration = A::declaration();
    declaration.name = A::NAME.to_owned();
    // The schema is always the one derived from the parameter type: a declaration cannot
    // state parameters its type does not read.
    declaration.params = params_schema::<A::Params>();
    declaration
}

/// The declaration of `A`, built once per process: output builders consult it on every
/// call, and building it derives a schema.
pub fn declared<A: Analysis>() -> Arc<AnalysisDeclaration> {
    static BUILT: OnceLock<Mutex<HashMap<TypeId, Arc<AnalysisDeclaration>>>> = OnceLock::new();
    let mut built = BUILT
        .get_or_init(Default::default)
        .lock()
        .unwrap_or_else(|poisoned| poisoned.into_inner());
    built
        .entry(TypeId::of::<A>())
        .or_insert_with(|| Arc::new(declaration_of::<A>()))
        .clone()
}

/// The JSON Schema of a parameter type, in the subset the host validates: subschemas are
/// written inline (no `$ref`), and every object schema is closed
/// (`additionalProperties: false`), so unknown parameters are refused even where
/// `#[serde(flatten)]` rules out serde's `deny_unknown_fields`.
pub fn params_schema<P: schemars::JsonSchema>() -> Value {
    let generator = schemars::generate::SchemaSettings::draft2020_12()
        .with(|settings| {
            settings.inline_subschemas = true;
            settings.meta_schema = None;
        })
        .into_generator();
    let mut schema = generator.into_root_schema_for::<P>().to_value();
    close_objects(&mut schema);
    schema
}

fn close_objects(schema: &mut Value) {
    match schema {
        Value::Object(map) => {
            if map.contains_key("properties") && !map.contains_key("additionalProperties") {
                map.insert("additionalProperties".into(), Value::Bool(false));
            }
            for (key, value) in map.iter_mut() {
                // `enum`, `const`, `default` and `examples` hold values, not schemas.
                if !matches!(key.as_str(), "enum" | "const" | "default" | "examples") {
                    close_objects(value);
                }
            }
        }
        Value::Array(items) => items.iter_mut().for_each(close_objects),
        _ => {}
    }
}

/// Deserialises the parameters and runs the analysis: what a call through the C boundary
/// does. The output is not checked here: the host checks every output against the
/// declaration, whichever SDK built it.
fn run_params<A: Analysis>(params_json: &str, inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
    let params: A::Params = serde_json::from_str(params_json)
        .map_err(|error| AnalysisError::InvalidInput(format!("parameters of {}: {error}", A::NAME)))?;
    A::run(params, inputs, host)
}

/// Runs an analysis from JSON parameters, as the host would, without the C boundary: the
/// parameters are checked against the declared schema with the host's validator first, and
/// the output against the declaration after.
pub fn run_typed<A: Analysis>(
    params_json: &str,
    inputs: &Inputs,
    host: &Host,
) -> Result<AnalysisOutput, AnalysisError> {
    let params: Value = serde_json::from_str(params_json)
        .map_err(|error| AnalysisError::InvalidInput(format!("parameters of {}: {error}", A::NAME)))?;
    crate::param_schema::validate(&declared::<A>().params, &params)
        .map_err(|message| AnalysisError::InvalidInput(format!("parameters of {}: {message}", A::NAME)))?;
    let output = run_params::<A>(params_json, inputs, host)?;
    check_output(&declared::<A>(), &output.table, &output.summary)
        .map_err(|violation| AnalysisError::Bug(format!("{}: {violation}", A::NAME)))?;
    Ok(output)
}

/// The declaration type of a table column, `None` for a type no [`ColumnType`] covers.
pub fn column_type(dtype: &DataType) -> Option<ColumnType> {
    match dtype {
        DataType::Float64 => Some(ColumnType::F64),
        DataType::Int64 => Some(ColumnType::I64),
        DataType::String => Some(ColumnType::Str),
        DataType::Boolean => Some(ColumnType::Bool),
        _ => None,
    }
}

/// Checks an output table and summary against a declaration (the host's check of every
/// call, and [`run_typed`]'s).
pub fn check_output(
    declaration: &AnalysisDeclaration,
    table: &DataFrame,
    summary: &Map<String, Value>,
) -> Result<(), ContractViolation> {
    declaration.check_output(
        table
            .columns()
            .iter()
            .map(|column| (column.name().as_str(), column_type(column.dtype()))),
        summary,
    )
}

/// A float output column: the values (0 where null) and a validity bit per row. A long table
/// of optional floats pushed as `Vec<Option<f64>>` spends most of its time growing vectors of
/// 16-byte options and converting them; this one holds the values in the layout the column
/// keeps and the validity as the bitmap's own words, so [`FloatColumn::into_column`] moves the
/// values in and copies only one bit per row.
///
/// Build it row by row ([`FloatColumn::push`] and the `extend_*` methods), or, for a table
/// filled in parallel, start from [`FloatColumn::nulls`] and write disjoint stretches of
/// [`FloatColumn::parts_mut`].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FloatColumn {
    values: Vec<f64>,
    /// Bit `row % 64` of word `row / 64` is set when the value of `row` is present: the bit
    /// order of Arrow's validity bitmap (Arrow columnar format, "Validity bitmaps"), a word
    /// at a time. The bits past the last row are clear.
    validity: Vec<u64>,
}

/// Rows per validity word of a [`FloatColumn`].
pub const VALIDITY_WORD_ROWS: usize = 64;

impl FloatColumn {
    /// An empty column with room for `rows` rows.
    pub fn with_capacity(rows: usize) -> Self {
        FloatColumn {
            values: Vec::with_capacity(rows),
            validity: Vec::with_capacity(rows.div_ceil(VALIDITY_WORD_ROWS)),
        }
    }

    /// `rows` nulls (values 0), to be filled in place through [`FloatColumn::parts_mut`].
    pub fn nulls(rows: usize) -> Self {
        FloatColumn {
            values: vec![0.0; rows],
            validity: vec![0; rows.div_ceil(VALIDITY_WORD_ROWS)],
        }
    }

    /// Appends a row: the value, or null for `None`.
    #[inline]
    pub fn push(&mut self, value: Option<f64>) {
        let row = self.values.len();
        if row.is_multiple_of(VALIDITY_WORD_ROWS) {
            self.validity.push(0);
        }
        self.values.push(value.unwrap_or(0.0));
        if value.is_some() {
            self.validity[row / VALIDITY_WORD_ROWS] |= 1 << (row % VALIDITY_WORD_ROWS);
        }
    }

    /// Appends `rows` nulls.
    pub fn push_nulls(&mut self, rows: usize) {
        self.extend_repeated(None, rows);
    }

    /// Appends `rows` rows of `value` (nulls for `None`).
    pub fn extend_repeated(&mut self, value: Option<f64>, rows: usize) {
        let start = self.values.len();
        self.values.resize(start + rows, value.unwrap_or(0.0));
        self.grow_validity(start, value.is_some());
    }

    /// Appends a row for each of `values`, all present.
    pub fn extend_values(&mut self, values: &[f64]) {
        let start = self.values.len();
        self.values.extend_from_slice(values);
        self.grow_validity(start, true);
    }

    /// Extends the validity to the values' length; the rows from `start` on are present or not.
    fn grow_validity(&mut self, start: usize, present: bool) {
        let end = self.values.len();
        self.validity.resize(end.div_ceil(VALIDITY_WORD_ROWS), 0);
        if present && end > start {
            let (first, last) = (start / VALIDITY_WORD_ROWS, (end - 1) / VALIDITY_WORD_ROWS);
            let from_start = u64::MAX << (start % VALIDITY_WORD_ROWS);
            let to_end = u64::MAX >> (VALIDITY_WORD_ROWS - 1 - (end - 1) % VALIDITY_WORD_ROWS);
            if first == last {
                self.validity[first] |= from_start & to_end;
            } else {
                self.validity[first] |= from_start;
                self.validity[first + 1..last].fill(u64::MAX);
                self.validity[last] |= to_end;
            }
        }
    }

    /// The value of `row`, None when it is null.
    #[inline]
    pub fn get(&self, row: usize) -> Option<f64> {
        let present = (self.validity[row / VALIDITY_WORD_ROWS] >> (row % VALIDITY_WORD_ROWS)) & 1 != 0;
        present.then(|| self.values[row])
    }

    /// The values, 0 where null.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// The values (0 where null) and the validity words ([`VALIDITY_WORD_ROWS`] rows each,
    /// bit `row % 64` of word `row / 64`, least significant first), to be written in place.
    /// The writer keeps the bits past the last row clear.
    pub fn parts_mut(&mut self) -> (&mut [f64], &mut [u64]) {
        (&mut self.values, &mut self.validity)
    }

    pub fn len(&self) -> usize {
        self.values.len()
    }

    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// The column named `name`; the values buffer becomes the column's without a copy.
    pub fn into_column(self, name: PlSmallStr) -> Column {
        let bitmap = validity(&self.validity, self.values.len());
        Float64Chunked::from_vec_validity(name, self.values, bitmap).into_column()
    }
}

/// A text column given as runs of one value (`None` for a run of nulls), in row order: each
/// run's text is stored once and its rows share one Arrow string view, so a column of a few
/// long runs (a sample name per reading, a kind per plotted row) costs a view per row, not a
/// text per row.
pub fn text_runs_column<'a>(name: PlSmallStr, runs: impl IntoIterator<Item = (Option<&'a str>, usize)>) -> Column {
    let mut array = MutableBinaryViewArray::<str>::new();
    for (value, rows) in runs {
        match value {
            Some(text) if rows > 0 => array.extend_constant(rows, Some(text)),
            Some(_) => {}
            // `extend_constant` with `None` marks the rows null without adding their views.
            None => array.extend_null(rows),
        }
    }
    StringChunked::with_chunk(name, array.freeze()).into_column()
}

/// A validity bitmap (Arrow's layout: bit i of byte i / 8, least significant first) of `rows`
/// rows from words of 64 rows; `None` when every value is present, so that a column without
/// nulls carries no bitmap.
fn validity(words: &[u64], rows: usize) -> Option<Bitmap> {
    let full_words = rows / VALIDITY_WORD_ROWS;
    let tail = rows % VALIDITY_WORD_ROWS;
    let all_present = words[..full_words].iter().all(|&word| word == u64::MAX)
        && (tail == 0 || words[full_words] == u64::MAX >> (VALIDITY_WORD_ROWS - tail));
    if all_present {
        return None;
    }
    let mut bytes: Vec<u8> = words.iter().flat_map(|word| word.to_le_bytes()).collect();
    bytes.truncate(rows.div_ceil(8));
    Some(Bitmap::from_u8_vec(bytes, rows))
}

/// Builds an [`AnalysisOutput`] that holds only what the analysis declared.
///
/// Every column and summary key is checked as it is added; the first violation is kept
/// and returned by [`OutputBuilder::finish`] as [`AnalysisError::Bug`], so the building code
/// stays a straight sequence of calls. Columns keep the order in which they are added.
pub struct OutputBuilder {
    declaration: Arc<AnalysisDeclaration>,
    columns: Vec<Column>,
    summary: Map<String, Value>,
    warnings: Vec<String>,
    violation: Option<ContractViolation>,
}

impl OutputBuilder {
    /// A builder for analysis `A`.
    pub fn of<A: Analysis>() -> Self {
        Self::new(declared::<A>())
    }

    /// A builder for a declaration.
    pub fn new(declaration: Arc<AnalysisDeclaration>) -> Self {
        OutputBuilder {
            declaration,
            columns: Vec::new(),
            summary: Map::new(),
            warnings: Vec::new(),
            violation: None,
        }
    }

    fn record(&mut self, outcome: Result<(), ContractViolation>) -> bool {
        match outcome {
            Ok(()) => true,
            Err(violation) => {
                self.violation.get_or_insert(violation);
                false
            }
        }
    }

    /// Adds a ready column without copying it (a `Series` converts with `into_column`).
    pub fn column(&mut self, column: Column) -> &mut Self {
        let checked = self
            .declaration
            .check_column(column.name().as_str(), column_type(column.dtype()));
        if self.record(checked) {
            self.columns.push(column);
        }
        self
    }

    /// Adds a float column without nulls.
    pub fn f64(&mut self, name: &str, values: Vec<f64>) -> &mut Self {
        self.column(Column::new(PlSmallStr::from_str(name), values))
    }

    /// Adds a float column with nulls.
    pub fn f64_nullable(&mut self, name: &str, values: Vec<Option<f64>>) -> &mut Self {
        self.column(Column::new(PlSmallStr::from_str(name), values))
    }

    /// Adds a float column built row by row ([`FloatColumn`]): its values are moved into
    /// the table, not copied.
    pub fn f64_column(&mut self, name: &str, values: FloatColumn) -> &mut Self {
        self.column(values.into_column(PlSmallStr::from_str(name)))
    }

    /// Adds an integer column.
    pub fn i64(&mut self, name: &str, values: Vec<i64>) -> &mut Self {
        self.column(Column::new(PlSmallStr::from_str(name), values))
    }

    /// Adds an integer column with nulls.
    pub fn i64_nullable(&mut self, name: &str, values: Vec<Option<i64>>) -> &mut Self {
        self.column(Column::new(PlSmallStr::from_str(name), values))
    }

    /// Adds a text column.
    pub fn str<S: AsRef<str>>(&mut self, name: &str, values: &[S]) -> &mut Self {
        let values: Vec<&str> = values.iter().map(AsRef::as_ref).collect();
        self.column(Column::new(PlSmallStr::from_str(name), values))
    }

    /// Adds a text column with nulls.
    pub fn str_nullable(&mut self, name: &str, values: Vec<Option<String>>) -> &mut Self {
        self.column(Series::new(PlSmallStr::from_str(name), values).into_column())
    }

    /// Adds a boolean column.
    pub fn bool(&mut self, name: &str, values: Vec<bool>) -> &mut Self {
        self.column(Column::new(PlSmallStr::from_str(name), values))
    }

    /// Sets a summary value; `value` is anything serde writes as a JSON scalar or list.
    pub fn summary(&mut self, key: &str, value: impl serde::Serialize) -> &mut Self {
        let value = serde_json::to_value(value).unwrap_or(Value::Null);
        let checked = match self.declaration.summary_key(key) {
            None => Err(ContractViolation(format!("summary key `{key}` is not declared"))),
            Some(spec) if !spec.dtype.admits(&value) => Err(ContractViolation(format!(
                "summary key `{key}` is declared {} but holds {value}",
                spec.dtype.as_str()
            ))),
            Some(_) => Ok(()),
        };
        if self.record(checked) {
            self.summary.insert(key.to_owned(), value);
        }
        self
    }

    /// Sets every entry of a summary map (for example a sweep's identity keys).
    pub fn summary_map(&mut self, entries: Map<String, Value>) -> &mut Self {
        for (key, value) in entries {
            self.summary(&key, value);
        }
        self
    }

    /// Adds a warning for the client.
    pub fn warn(&mut self, warning: impl Into<String>) -> &mut Self {
        self.warnings.push(warning.into());
        self
    }

    /// Adds warnings for the client.
    pub fn warnings(&mut self, warnings: impl IntoIterator<Item = String>) -> &mut Self {
        self.warnings.extend(warnings);
        self
    }

    /// The output, or the first contract violation (a plugin bug); `height` is the row
    /// count, needed when the table has no column.
    pub fn finish(&mut self, height: usize) -> Result<AnalysisOutput, AnalysisError> {
        let bug = |violation: ContractViolation| AnalysisError::Bug(format!("{}: {violation}", self.declaration.name));
        if let Some(violation) = self.violation.take() {
            return Err(bug(violation));
        }
        let columns = std::mem::take(&mut self.columns);
        let names: Vec<(String, Option<ColumnType>)> = columns
            .iter()
            .map(|column| (column.name().to_string(), column_type(column.dtype())))
            .collect();
        self.declaration
            .check_output(names.iter().map(|(name, dtype)| (name.as_str(), *dtype)), &Map::new())
            .map_err(bug)?;
        let table = DataFrame::new(height, columns)
            .map_err(|error| AnalysisError::Bug(format!("{}: {error}", self.declaration.name)))?;
        Ok(AnalysisOutput {
            table,
            summary: std::mem::take(&mut self.summary),
            warnings: std::mem::take(&mut self.warnings),
        })
    }
}

/// How a message names a row of an input table: as a person counts data rows, from 1 (as
/// the daemon's own import messages do), with the 0-based offset `dataset.rows` takes to
/// show it: `data row 6 (offset 5)`.
pub fn data_row(row: usize) -> String {
    format!("data row {} (offset {row})", row + 1)
}

/// An [`AnalysisError::InvalidInput`] with this message: the input or the parameters must
/// change.
pub fn invalid(message: impl Into<String>) -> AnalysisError {
    AnalysisError::InvalidInput(message.into())
}

/// Replaces interior NUL bytes so that any message can cross as a C string.
fn c_string_lossy(text: &str) -> CString {
    CString::new(text.replace('\0', " ")).unwrap_or_default()
}

fn into_raw_c_string(text: &str) -> *mut c_char {
    c_string_lossy(text).into_raw()
}

fn panic_message(payload: &(dyn std::any::Any + Send)) -> String {
    if let Some(text) = payload.downcast_ref::<&str>() {
        (*text).to_owned()
    } else if let Some(text) = payload.downcast_ref::<String>() {
        text.clone()
    } else {
        "unknown panic payload".to_owned()
    }
}

/// Body of the exported `describe`: the JSON declaration of every registered analysis.
pub fn describe_registered(registry: &[Registration]) -> *mut c_char {
    let built = catch_unwind(|| {
        let declaration = PluginDeclaration {
            // The SDK imports text in either layout; views spare the host a copy.
            features: vec![abi::FEATURE_STRING_VIEWS.to_owned()],
            analyses: registry.iter().map(|entry| (entry.declaration)()).collect(),
        };
        serde_json::to_string(&declaration).map(|json| into_raw_c_string(&json))
    });
    match built {
        Ok(Ok(pointer)) => pointer,
        _ => std::ptr::null_mut(),
    }
}

/// Body of the exported `release_string`.
///
/// # Safety
/// `text` is NULL or a pointer this SDK returned and that was not released before.
pub unsafe fn release_string(text: *mut c_char) {
    if !text.is_null() {
        // SAFETY: created by `CString::into_raw` in this library.
        drop(unsafe { CString::from_raw(text) });
    }
}

/// Body of the exported `invoke`: imports the inputs, runs the analysis, exports the output.
///
/// # Safety
/// The arguments satisfy the contract of [`abi::InvokeFn`].
pub unsafe fn invoke_registered(
    registry: &[Registration],
    analysis: *const c_char,
    params_json: *const c_char,
    inputs: *const InputTable,
    input_count: usize,
    context: *const HostContext,
    output: *mut InvokeOutput,
) -> i32 {
    if output.is_null() {
        return abi::STATUS_INVALID_INPUT;
    }
    let outcome = catch_unwind(AssertUnwindSafe(|| {
        // SAFETY: the contract of InvokeFn.
        unsafe { invoke_unguarded(registry, analysis, params_json, inputs, input_count, context, output) }
    }));
    let (status, message) = match outcome {
        Ok(Ok(())) => return abi::STATUS_OK,
        Ok(Err((status, message))) => (status, message),
        Err(payload) => (
            abi::STATUS_PANIC,
            format!("the analysis panicked: {}", panic_message(payload.as_ref())),
        ),
    };
    // Writing the message must not unwind either; CString creation cannot panic here.
    // SAFETY: `output` is valid per the contract.
    unsafe { (*output).error_message = into_raw_c_string(&message) };
    status
}

/// The work of [`invoke_registered`] without the panic guard.
///
/// # Safety
/// The arguments satisfy the contract of [`abi::InvokeFn`]; `output` is not NULL.
unsafe fn invoke_unguarded(
    registry: &[Registration],
    analysis: *const c_char,
    params_json: *const c_char,
    inputs: *const InputTable,
    input_count: usize,
    context: *const HostContext,
    output: *mut InvokeOutput,
) -> Result<(), (i32, String)> {
    let invalid = |message: String| (abi::STATUS_INVALID_INPUT, message);
    // SAFETY (this block): pointers are valid NUL-terminated strings per the contract.
    let name = unsafe { CStr::from_ptr(analysis) }
        .to_str()
        .map_err(|_| invalid("analysis name is not UTF-8".into()))?;
    let params = unsafe { CStr::from_ptr(params_json) }
        .to_str()
        .map_err(|_| invalid("parameters are not UTF-8".into()))?;
    let entry = registry.iter().find(|entry| entry.name == name).ok_or_else(|| {
        (
            abi::STATUS_UNKNOWN_ANALYSIS,
            format!("this plugin has no analysis `{name}`"),
        )
    })?;

    let mut tables = Vec::with_capacity(input_count);
    for index in 0..input_count {
        // SAFETY: `inputs` holds `input_count` valid entries.
        let table = unsafe { &*inputs.add(index) };
        let role = unsafe { CStr::from_ptr(table.role) }.to_string_lossy().into_owned();
        // Take ownership: the host's structs are left released, so it will not free them.
        let array = unsafe { table_ffi::take_array(table.array) };
        let schema = unsafe { table_ffi::take_schema(table.schema) };
        let frame = unsafe { table_ffi::import_frame(&schema, array) }
            .map_err(|error| invalid(format!("input `{role}`: {error}")))?;
        tables.push((role, frame));
    }
    let host = Host {
        context: if context.is_null() {
            None
        } else {
            Some(unsafe { &*context })
        },
    };
    let result = (entry.run)(params, &Inputs::from_tables(tables), &host)
        .map_err(|error| (error.status(), error.to_string()))?;

    let result_json = serde_json::json!({ "summary": result.summary, "warnings": result.warnings }).to_string();
    // Text leaves as string views: every host reads them (a 1.0 daemon did too).
    let (schema, array) = table_ffi::export_frame(&result.table).map_err(|error| {
        (
            abi::STATUS_PANIC,
            format!("the analysis produced an unusable table: {error}"),
        )
    })?;
    // SAFETY: `output` is valid; the host initialised it with empty structs, which need no release.
    unsafe {
        std::ptr::write(&mut (*output).schema, schema);
        std::ptr::write(&mut (*output).array, array);
        (*output).result_json = into_raw_c_string(&result_json);
    }
    Ok(())
}

/// Reads a float column, accepting integers (CSV readers make `300` an integer).
pub fn float_column(frame: &DataFrame, name: &str) -> Result<Vec<Option<f64>>, AnalysisError> {
    let column = frame
        .column(name)
        .map_err(|_| AnalysisError::InvalidInput(format!("column `{name}` is missing; add it to the input table")))?;
    if !(column.dtype().is_primitive_numeric() || column.dtype().is_null()) {
        return Err(AnalysisError::InvalidInput(format!(
            "column `{name}` must be numeric (found {})",
            column.dtype()
        )));
    }
    let cast = column.cast(&DataType::Float64).map_err(|_| {
        AnalysisError::InvalidInput(format!("column `{name}` must be numeric (found {})", column.dtype()))
    })?;
    Ok(cast.f64().expect("cast to Float64").iter().collect())
}

/// Reads an integer column, accepting floats that hold whole numbers.
pub fn integer_column(frame: &DataFrame, name: &str) -> Result<Vec<Option<i64>>, AnalysisError> {
    let floats = float_column(frame, name)?;
    floats
        .into_iter()
        .enumerate()
        .map(|(row, value)| match value {
            Some(v) if v.fract() == 0.0 && v.abs() < 9.0e15 => Ok(Some(v as i64)),
            Some(v) => Err(AnalysisError::InvalidInput(format!(
                "column `{name}` row {row}: {v} is not a whole number; contact numbers are integers"
            ))),
            None => Ok(None),
        })
        .collect()
}

/// Reads a string column.
pub fn string_column(frame: &DataFrame, name: &str) -> Result<Vec<Option<String>>, AnalysisError> {
    let column = frame
        .column(name)
        .map_err(|_| AnalysisError::InvalidInput(format!("column `{name}` is missing; add it to the input table")))?;
    let cast = column
        .cast(&DataType::String)
        .map_err(|_| AnalysisError::InvalidInput(format!("column `{name}` must be text (found {})", column.dtype())))?;
    Ok(cast
        .str()
        .expect("cast to String")
        .iter()
        .map(|v| v.map(str::to_owned))
        .collect())
}

/// Reads an optional float column: all `None` when the table does not have it.
pub fn optional_float_column(frame: &DataFrame, name: &str) -> Result<Vec<Option<f64>>, AnalysisError> {
    if frame.column(name).is_ok() {
        float_column(frame, name)
    } else {
        Ok(vec![None; frame.height()])
    }
}

/// Reads an optional text column: all `None` when the table does not have it.
pub fn optional_string_column(frame: &DataFrame, name: &str) -> Result<Vec<Option<String>>, AnalysisError> {
    if frame.column(name).is_ok() {
        string_column(frame, name)
    } else {
        Ok(vec![None; frame.height()])
    }
}

/// Writes the C side of a plugin: the entry function, its static descriptor, and the
/// `describe`, `invoke` and `release_string` functions, for the listed [`sdk::Analysis`]
/// types. The plugin version is the crate's `CARGO_PKG_VERSION`.
///
/// [`sdk::Analysis`]: crate::sdk::Analysis
#[macro_export]
macro_rules! export_plugin {
    (name: $name:literal, analyses: [$($analysis:ty),+ $(,)?] $(,)?) => {
        // The SDK turns a panic into STATUS_PANIC by catching it inside the exported
        // functions; with `panic = "abort"` there is nothing to catch and a panic would end
        // the host's process, so such a build is refused here, in the plugin's crate.
        #[cfg(panic = "abort")]
        compile_error!(concat!(
            "plugin `", $name, "` is built with `panic = \"abort\"`, but mobilis plugins must unwind so that ",
            "a panic becomes an error of one call instead of killing the daemon; remove `panic = \"abort\"` ",
            "from the [profile.*] sections of Cargo.toml (and `-C panic=abort` from RUSTFLAGS)"
        ));

        const _: () = {
            static REGISTRY: &[$crate::sdk::Registration] = &[$($crate::sdk::registration::<$analysis>()),+];

            /// # Safety
            /// No requirement: `unsafe` only to match `mobilis_sdk::abi::DescribeFn`.
            unsafe extern "C" fn describe() -> *mut ::std::os::raw::c_char {
                $crate::sdk::describe_registered(REGISTRY)
            }

            /// # Safety
            /// The contract of `mobilis_sdk::abi::InvokeFn`.
            unsafe extern "C" fn invoke(
                analysis: *const ::std::os::raw::c_char,
                params_json: *const ::std::os::raw::c_char,
                inputs: *const $crate::abi::InputTable,
                input_count: usize,
                context: *const $crate::abi::HostContext,
                output: *mut $crate::abi::InvokeOutput,
            ) -> i32 {
                // SAFETY: forwarded contract.
                unsafe {
                    $crate::sdk::invoke_registered(REGISTRY, analysis, params_json, inputs, input_count, context, output)
                }
            }

            /// # Safety
            /// `text` is NULL or a string this plugin returned.
            unsafe extern "C" fn release_string(text: *mut ::std::os::raw::c_char) {
                // SAFETY: forwarded contract.
                unsafe { $crate::sdk::release_string(text) }
            }

            static DESCRIPTOR: $crate::abi::PluginDescriptor = $crate::abi::PluginDescriptor {
                abi_major: $crate::abi::ABI_MAJOR,
                abi_minor: $crate::abi::ABI_MINOR,
                plugin_name: concat!($name, "\0").as_ptr().cast(),
                plugin_version: concat!(env!("CARGO_PKG_VERSION"), "\0").as_ptr().cast(),
                describe: Some(describe),
                invoke: Some(invoke),
                release_string: Some(release_string),
            };

            #[no_mangle]
            pub extern "C" fn mobilis_plugin_entry() -> *const $crate::abi::PluginDescriptor {
                &DESCRIPTOR
            }
        };
    };
}

#[cfg(test)]
mod tests {
    use super::*;

    // A column built row by row reads back as the options pushed, nulls where they were
    // pushed; a column without nulls carries no validity bitmap; the bitmap follows the
    // Arrow layout (bit i of byte i / 8, least significant bit first: Arrow columnar format,
    // "Validity bitmaps").
    #[test]
    fn float_column_reads_back_what_was_pushed() {
        let mut column = FloatColumn::with_capacity(4);
        column.push(Some(1.5));
        column.push(None);
        column.extend_values(&[2.5, -0.0]);
        column.extend_repeated(Some(7.0), 2);
        column.push_nulls(3);
        column.extend_repeated(None, 1);
        let expected = [
            Some(1.5),
            None,
            Some(2.5),
            Some(-0.0),
            Some(7.0),
            Some(7.0),
            None,
            None,
            None,
            None,
        ];
        assert_eq!(column.len(), expected.len());
        for (row, value) in expected.iter().enumerate() {
            assert_eq!(column.get(row), *value);
        }
        let bitmap = validity(&column.validity, column.len()).expect("nulls need a bitmap");
        assert_eq!(bitmap.len(), 10);
        let (bytes, offset, _) = bitmap.as_slice();
        assert_eq!(offset, 0);
        assert_eq!(bytes, &[0b0011_1101, 0b0000_0000]);
        let frame = DataFrame::new(10, vec![column.into_column(PlSmallStr::from_static("x"))]).unwrap();
        assert_eq!(float_column(&frame, "x").unwrap(), expected.to_vec());
        assert!(validity(&[0x1ff], 9).is_none());
    }

    /// Runs of a text, of nulls and of a long text read back row by row, and the long text
    /// is stored once.
    #[test]
    fn text_runs_read_back_row_by_row() {
        let long = "a text longer than the twelve bytes a view holds";
        let column = text_runs_column(
            PlSmallStr::from_static("kind"),
            [
                (Some("a"), 2),
                (None, 1),
                (Some(long), 3),
                (Some(""), 1),
                (Some("a"), 0),
                (Some(long), 1),
            ],
        );
        let expected = [
            Some("a"),
            Some("a"),
            None,
            Some(long),
            Some(long),
            Some(long),
            Some(""),
            Some(long),
        ];
        let texts: Vec<Option<&str>> = column.str().unwrap().iter().collect();
        assert_eq!(texts, expected);
        let array = column.str().unwrap().downcast_iter().next().unwrap().clone();
        let stored: usize = array.data_buffers().iter().map(|buffer| buffer.len()).sum();
        assert_eq!(stored, 2 * long.len(), "each run's long text once");
    }

    /// Runs that start and end inside words, span whole words and end on a word's edge
    /// read back row by row, as the same rows pushed one at a time do.
    #[test]
    fn float_column_runs_across_validity_words_match_pushed_rows() {
        let runs: [(Option<f64>, usize); 7] = [
            (Some(1.0), 3),
            (None, 70),
            (Some(2.0), 200),
            (None, 0),
            (Some(3.0), 61),
            (None, 1),
            (Some(4.0), 64),
        ];
        let mut by_runs = FloatColumn::with_capacity(0);
        let mut by_rows = FloatColumn::with_capacity(0);
        for (value, rows) in runs {
            match value {
                Some(value) if rows % 2 == 0 => by_runs.extend_values(&vec![value; rows]),
                _ => by_runs.extend_repeated(value, rows),
            }
            for _ in 0..rows {
                by_rows.push(value);
            }
        }
        assert_eq!(by_runs, by_rows);
        assert_eq!(by_runs.len(), 399);
        let mut row = 0;
        for (value, rows) in runs {
            for _ in 0..rows {
                assert_eq!(by_runs.get(row), value, "row {row}");
                row += 1;
            }
        }
        let mut all_present = FloatColumn::with_capacity(0);
        all_present.extend_values(&[1.0; 128]);
        all_present.extend_repeated(Some(2.0), 5);
        assert!(validity(&all_present.validity, all_present.len()).is_none());
        let mut nulls = FloatColumn::nulls(130);
        let (values, words) = nulls.parts_mut();
        values[129] = 9.0;
        words[2] |= 1 << 1;
        assert_eq!(nulls.get(129), Some(9.0));
        assert_eq!(nulls.get(128), None);
    }
}
