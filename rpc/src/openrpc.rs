//! The OpenRPC document served by `rpc.discover`, generated from the method table below
//! and from the loaded plugins' declarations.
//!
//! **Architecture Invariant.** [`METHODS`] is the single list of JSON-RPC methods: the
//! server registers exactly these names (a test compares them with the registered
//! module), so the document cannot drift from the code.

use crate::errors::ErrorKind;
use crate::service::Service;
use serde_json::{json, Value};

/// One JSON-RPC method as documented.
pub struct MethodDoc {
    pub name: &'static str,
    pub summary: &'static str,
    /// (name, required, JSON Schema as JSON text, description)
    pub params: &'static [(&'static str, bool, &'static str, &'static str)],
    /// JSON Schema of the result, as JSON text.
    pub result: &'static str,
}

const STRING: &str = r#"{"type": "string"}"#;
const OBJECT: &str = r#"{"type": "object"}"#;
const ARRAY: &str = r#"{"type": "array"}"#;
const UNITS: &str = r#"{"type": "object", "additionalProperties": {"anyOf": [{"type": "string"}, {"type": "object", "required": ["unit", "to"], "properties": {"unit": {"type": "string"}, "to": {"type": "string"}}}]}}"#;
const RENAME: &str = r#"{"type": "object", "additionalProperties": {"type": "string"}}"#;
const CSV_DIALECT: &str = r#"{"type": "object", "additionalProperties": false, "properties": {"separator": {"type": "string", "default": ",", "description": "one character, or \"tab\""}, "decimal_comma": {"type": "boolean", "default": false}, "comment_prefix": {"type": "string"}, "skip_rows": {"type": "integer", "minimum": 0, "default": 0, "description": "lines to skip before the header"}, "header": {"type": "boolean", "default": true, "description": "without a header the columns are column_1, column_2, ..."}}}"#;
const DATASET_SUMMARY: &str = r#"{"type": "object", "required": ["name", "rows", "columns"], "properties": {"name": {"type": "string"}, "rows": {"type": "integer"}, "columns": {"type": "array", "items": {"type": "object", "properties": {"name": {"type": "string"}, "dtype": {"type": "string"}}}}, "notes": {"type": "array", "items": {"type": "string"}, "description": "things the import noticed but did not refuse, such as text columns that look like numbers with a decimal comma"}}}"#;
const DEADLINE: &str = r#"{"type": "number", "exclusiveMinimum": 0, "maximum": 86400}"#;
const DATASET_PAGE: &str = r#"{"type": "object", "required": ["total", "offset", "datasets"], "properties": {"total": {"type": "integer", "description": "datasets matching prefix, over all pages"}, "offset": {"type": "integer"}, "datasets": {"type": "array", "items": {"type": "object", "required": ["name", "rows", "column_count"], "properties": {"name": {"type": "string"}, "rows": {"type": "integer"}, "column_count": {"type": "integer"}}}}}}"#;
const RUN_RESULT: &str = r#"{"type": "object", "required": ["output", "rows", "summary", "warnings"], "properties": {"output": {"type": "string"}, "rows": {"type": "integer"}, "columns": {"type": "array"}, "summary": {"type": "object"}, "warnings": {"type": "array", "items": {"type": "string"}}}}"#;

/// Every method the daemon serves.
pub const METHODS: &[MethodDoc] = &[
    MethodDoc {
        name: "server.info",
        summary: "Name, version, plugin ABI version, workspace, data roots, plugins loaded (name, version, isolation) and refused (file, reason), damaged workspace files, memory {stored_bytes, budget_bytes} of the stored tables",
        params: &[],
        result: OBJECT,
    },
    MethodDoc { name: "rpc.discover", summary: "This OpenRPC document", params: &[], result: OBJECT },
    MethodDoc {
        name: "plugin.list",
        summary: "Each plugin: name, version, library file, analyses, isolation (\"in_process\": in the daemon's process; \"isolated\": in supervised worker processes, where a crash, exit or hang fails one call with 5001)",
        params: &[],
        result: ARRAY,
    },
    MethodDoc { name: "analysis.list", summary: "Each analysis: name, plugin, one-line summary", params: &[], result: ARRAY },
    MethodDoc {
        name: "analysis.describe",
        summary: "An analysis's parameters (JSON Schema), input roles with their columns and units, output columns and summary keys",
        params: &[("analysis", true, STRING, "analysis name, for example hall.reduce")],
        result: OBJECT,
    },
    MethodDoc {
        name: "dataset.import",
        summary: "Stores a table read from a file inside the data roots (CSV, Parquet, Arrow IPC) or sent inline as columns; `rename` renames columns, then `units` converts columns into SI; `csv` describes a CSV file's dialect",
        params: &[
            ("name", true, STRING, "dataset name: letters, digits, _ - ., no path separators"),
            ("path", false, STRING, "file to read; relative paths resolve against the first data root"),
            ("columns", false, OBJECT, "inline table {column: [values]}"),
            ("format", false, r#"{"type": "string", "enum": ["csv", "parquet", "ipc"]}"#, "file format; default from the file name"),
            ("rename", false, RENAME, "{\"source name\": \"new_name\"}: rename any column (text ones too); applied first"),
            ("units", false, UNITS, "{column: unit} or {column: {unit, to}}, columns named after rename: convert into SI and rename by the quantity_unit convention"),
            ("csv", false, CSV_DIALECT, "CSV dialect: separator, decimal_comma, comment_prefix, skip_rows (lines before the header), header; rows with another number of fields than the header are errors naming their line"),
            ("overwrite", false, r#"{"type": "boolean", "default": false}"#, "replace an existing dataset of that name"),
            ("call_id", false, STRING, "client-chosen id, unique among running calls: the token of the import's progress (progress.subscribe, analysis.progress; stages reading, parsing, converting units, storing) and the handle to cancel it between stages (analysis.cancel)"),
        ],
        result: DATASET_SUMMARY,
    },
    MethodDoc {
        name: "dataset.list",
        summary: "A page of the stored datasets in name order: name, rows and column count of each (dataset.info has the columns and provenance); total counts every match, so a client pages with offset until it has them all",
        params: &[
            ("offset", false, r#"{"type": "integer", "minimum": 0, "default": 0}"#, "first dataset of the page, counted in name order among the matches"),
            ("limit", false, r#"{"type": "integer", "minimum": 0, "maximum": 5000, "default": 200}"#, "datasets per page, at most 5000"),
            ("prefix", false, STRING, "only datasets whose name starts with this text"),
        ],
        result: DATASET_PAGE,
    },
    MethodDoc {
        name: "dataset.info",
        summary: "A dataset's rows, columns, creation time and provenance (for an analysis output also the run's summary and warnings as answered: run_summary, warnings)",
        params: &[("name", true, STRING, "dataset name")],
        result: OBJECT,
    },
    MethodDoc {
        name: "dataset.drop",
        summary: "Removes a dataset from memory and from the workspace",
        params: &[("name", true, STRING, "dataset name")],
        result: OBJECT,
    },
    MethodDoc {
        name: "dataset.rows",
        summary: "A page of rows as columns of JSON values (SI units; NaN as null)",
        params: &[
            ("name", true, STRING, "dataset name"),
            ("offset", false, r#"{"type": "integer", "minimum": 0, "default": 0}"#, "first row"),
            ("limit", false, r#"{"type": "integer", "minimum": 0, "maximum": 100000, "default": 1000}"#, "number of rows"),
        ],
        result: r#"{"type": "object", "required": ["total_rows", "columns"], "properties": {"total_rows": {"type": "integer"}, "offset": {"type": "integer"}, "columns": {"type": "object"}}}"#,
    },
    MethodDoc {
        name: "dataset.export",
        summary: "Writes a dataset to a file inside the data roots (CSV, Parquet or Arrow IPC)",
        params: &[
            ("name", true, STRING, "dataset name"),
            ("path", true, STRING, "file to write; its directory must exist inside a data root"),
            ("format", false, r#"{"type": "string", "enum": ["csv", "parquet", "ipc"]}"#, "file format; default from the file name"),
            ("units", false, r#"{"type": "string", "enum": ["si", "customary"], "default": "si"}"#, "si: as stored; customary: densities in cm^-3 and cm^-2, mobilities in cm^2/(V s), resistivities in ohm cm, lengths in um, each column renamed after its unit (density_m3 -> density_cm3)"),
            ("overwrite", false, r#"{"type": "boolean", "default": false}"#, "replace an existing file at path; without it an existing file is left as it is and the call fails. The file is written under a temporary name and renamed into place, so it is never seen half-written"),
        ],
        result: OBJECT,
    },
    MethodDoc {
        name: "analysis.run",
        summary: "Runs an analysis on stored datasets and stores its output table; with group_by, once per group of the first input, outputs concatenated and one summary per group",
        params: &[
            ("analysis", true, STRING, "analysis name"),
            ("inputs", true, r#"{"type": "object", "additionalProperties": {"type": "string"}}"#, "{role: dataset}"),
            ("params", false, OBJECT, "the analysis's parameters (see analysis.describe and components.schemas)"),
            ("output", true, STRING, "name of the dataset to store the output table in"),
            ("group_by", false, r#"{"anyOf": [{"type": "string"}, {"type": "array", "items": {"type": "string"}}]}"#, "column(s) of the first input to group by"),
            ("overwrite", false, r#"{"type": "boolean", "default": false}"#, "replace an existing output dataset"),
            ("call_id", false, STRING, "client-chosen id, unique among running calls: the token of its progress (progress.subscribe, analysis.progress) and the handle to cancel it (analysis.cancel)"),
            ("summary_output", false, STRING, "also store the summary as a dataset: one row per group, one column per scalar value"),
            ("deadline_s", false, DEADLINE, "stop the call after this many seconds with error 5005 deadline_exceeded, storing nothing (default 600, at most 86400)"),
        ],
        result: RUN_RESULT,
    },
    MethodDoc {
        name: "analysis.cancel",
        summary: "Asks a running analysis.run (by its call_id) to stop; the run then fails with the cancelled error",
        params: &[("call_id", true, STRING, "the call_id given to analysis.run")],
        result: OBJECT,
    },
    MethodDoc {
        name: "analysis.progress",
        summary: "The progress last reported by a running analysis.run (by its call_id)",
        params: &[("call_id", true, STRING, "the call_id given to analysis.run")],
        result: OBJECT,
    },
    MethodDoc {
        name: "pipeline.run",
        summary: "Runs analysis.run steps in order; a step may name an earlier step's output; every step is checked before the first runs",
        params: &[
            ("steps", true, r#"{"type": "array", "items": {"type": "object"}, "minItems": 1}"#, "analysis.run parameter objects, without call_id"),
            ("call_id", false, STRING, "client-chosen id of the whole pipeline: its progress token and the handle to cancel it"),
            ("deadline_s", false, DEADLINE, "stop the pipeline after this many seconds with error 5005 deadline_exceeded; outputs of steps finished before are kept (default 600, at most 86400)"),
        ],
        result: r#"{"type": "object", "properties": {"steps": {"type": "array"}}}"#,
    },
    MethodDoc {
        name: "plot.render",
        summary: "Draws a stored dataset: SVG drawn by the daemon and the same figure as a Vega-Lite v5 specification. Without `kind`, the figure suits the analysis that produced the dataset (see plot.kinds); axes in the customary units of the trade, uncertainties as error bars",
        params: &[
            ("dataset", true, STRING, "dataset name"),
            ("kind", false, STRING, "a kind from plot.kinds; default: the first kind for the analysis that made the dataset, else `columns`"),
            ("filter", false, r#"{"type": "object", "additionalProperties": {"type": ["string", "number", "boolean"]}}"#, "keep rows whose columns equal these values, for example {\"sample\": \"W1\"} (temperature_K and field_T within their setpoint's tolerance); the title names them"),
            ("format", false, r#"{"type": "string", "enum": ["svg", "vega-lite", "both"], "default": "both"}"#, "which renderings to return"),
            ("x", false, STRING, "x column, for kind `columns`"),
            ("y", false, r#"{"type": "array", "items": {"type": "string"}}"#, "y column(s), for kind `columns`"),
            ("y_error", false, r#"{"type": "array", "items": {"type": "string"}}"#, "1-sigma uncertainty column per y column, for kind `columns`"),
            ("series_by", false, r#"{"type": "array", "items": {"type": "string"}}"#, "columns whose value combinations become separate series; temperature_K and field_T by their nominal values (0.4997 and 0.5002 T are one series, 0.5 T). Default: the kind's choice"),
            ("log_x", false, r#"{"type": "boolean"}"#, "override the kind's choice of a logarithmic x axis"),
            ("log_y", false, r#"{"type": "boolean"}"#, "override the kind's choice of a logarithmic y axis"),
            ("title", false, STRING, "figure title"),
            ("width", false, r#"{"type": "number", "exclusiveMinimum": 0}"#, "width in pixels"),
            ("height", false, r#"{"type": "number", "exclusiveMinimum": 0}"#, "height in pixels"),
            ("analysis", false, STRING, "draw as if the dataset came from this analysis (default: its provenance)"),
            ("deadline_s", false, DEADLINE, "stop after this many seconds with error 5005 deadline_exceeded (default 120, at most 86400)"),
        ],
        result: r#"{"type": "object", "required": ["dataset", "kind", "title"], "properties": {"dataset": {"type": "string"}, "kind": {"type": "string"}, "title": {"type": "string"}, "svg": {"type": "string"}, "vega_lite": {"type": "object"}}}"#,
    },
    MethodDoc {
        name: "plot.kinds",
        summary: "The figures plot.render can draw, each with the analyses whose outputs it draws; with `dataset`, only those that apply to it",
        params: &[("dataset", false, STRING, "dataset name")],
        result: ARRAY,
    },
    MethodDoc {
        name: "report.samples",
        summary: "Every sample named in a `sample` column of a stored dataset, with the datasets that hold it",
        params: &[],
        result: r#"{"type": "array", "items": {"type": "object", "required": ["sample", "datasets"], "properties": {"sample": {"type": "string"}, "datasets": {"type": "array", "items": {"type": "string"}}}}}"#,
    },
    MethodDoc {
        name: "report.render",
        summary: "One self-contained HTML page for a sample: first its results (each analysis's key numbers with uncertainties, fit quality and flags, from the stored run summaries), then every dataset holding it, in the order the work went, with figures (inline SVG), key columns first, the full table behind a disclosure and as a CSV download, quality flags, and provenance (source files, analyses, parameters, plugin and daemon versions); prints on A4 and Letter",
        params: &[
            ("sample", true, STRING, "the sample's name, as in the `sample` column"),
            ("deadline_s", false, DEADLINE, "stop after this many seconds with error 5005 deadline_exceeded (default 120, at most 86400)"),
        ],
        result: r#"{"type": "object", "required": ["sample", "datasets", "figures", "html"], "properties": {"sample": {"type": "string"}, "datasets": {"type": "array", "items": {"type": "string"}}, "figures": {"type": "integer"}, "html": {"type": "string"}}}"#,
    },
    MethodDoc {
        name: "progress.subscribe",
        summary: "WebSocket and stdio only: subscribes to the progress of the call with this call_id (subscribe before starting the call). The daemon sends `progress.event` notifications, params {subscription, result: event}, where event is {call_id, kind: \"begin\", title}, then {call_id, kind: \"report\", fraction 0-1, message} at most every 100 ms, then {call_id, kind: \"end\", outcome: \"done\"|\"failed\"|\"cancelled\", message?}, after which the subscription is over. A call that ended recently answers with its end event at once",
        params: &[("call_id", true, STRING, "the call_id the call will be (or was) given")],
        result: r#"{"description": "subscription id", "anyOf": [{"type": "integer"}, {"type": "string"}]}"#,
    },
    MethodDoc {
        name: "progress.unsubscribe",
        summary: "Ends a progress subscription early; params by position: [subscription id]",
        params: &[("subscription", true, r#"{"anyOf": [{"type": "integer"}, {"type": "string"}]}"#, "the id progress.subscribe returned")],
        result: r#"{"type": "boolean"}"#,
    },
];

fn parse(text: &str) -> Value {
    serde_json::from_str(text).expect("method table schemas are valid JSON")
}

/// The OpenRPC document of this daemon with its plugins.
pub fn document(service: &Service) -> Value {
    let errors: Vec<Value> = ErrorKind::ALL
        .iter()
        .map(|kind| json!({ "code": kind.code(), "message": kind.description(), "data": { "kind": kind.name() } }))
        .collect();
    let methods: Vec<Value> = METHODS
        .iter()
        .map(|method| {
            let params: Vec<Value> = method
                .params
                .iter()
                .map(|(name, required, schema, description)| {
                    json!({ "name": name, "required": required, "description": description, "schema": parse(schema) })
                })
                .collect();
            let mut entry = json!({
                "name": method.name,
                "summary": method.summary,
                "paramStructure": if method.name == "progress.unsubscribe" { "by-position" } else { "by-name" },
                "params": params,
                "result": { "name": "result", "schema": parse(method.result) },
            });
            if !matches!(
                method.name,
                "rpc.discover" | "server.info" | "plugin.list" | "analysis.list" | "report.samples"
            ) {
                entry["errors"] = Value::Array(errors.clone());
            }
            entry
        })
        .collect();
    let mut schemas = serde_json::Map::new();
    for (name, entry) in &service.host.analyses {
        let mut schema = entry.declaration.params.clone();
        if let Value::Object(map) = &mut schema {
            map.insert(
                "description".into(),
                json!(format!("parameters of {name}: {}", entry.declaration.summary)),
            );
        }
        schemas.insert(format!("{name}.params"), schema);
    }
    json!({
        "openrpc": "1.3.2",
        "info": {
            "title": "mobilisd",
            "version": env!("CARGO_PKG_VERSION"),
            "description": "Analysis server for semiconductor transport measurements. Analyses come from plugins; their parameter schemas are in components.schemas as `<analysis>.params`. An error's data holds its kind, often a help line, and, when one request parameter is at fault, its path as param (`output`, `inputs.readings`, `params.temperature_tolerance_K`, `group_by`).",
        },
        "methods": methods,
        "components": { "schemas": schemas },
    })
}
