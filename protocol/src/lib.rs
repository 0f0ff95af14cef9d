//! The mobilis JSON-RPC protocol, written once: the params and result type of every method,
//! the method table, the error kinds clients see, and the progress notification.
//!
//! **Architecture Invariant.** The daemon, the Rust client and the CLI all speak through
//! these types, and `rpc.discover` is generated from them (with [`schema_of`]), so the
//! documentation, the daemon's check of a request and the clients cannot drift apart.
//! This crate knows no transport, no async runtime and no table library: a client that
//! links it pays for serde and JSON Schema only.

pub mod errors;
pub mod openrpc;
pub mod params;
pub mod progress;
pub mod results;

pub use errors::{ErrorData, ErrorKind};
pub use progress::{Outcome, ProgressEvent, PROGRESS_NOTIFICATION};

use schemars::generate::SchemaSettings;
use schemars::JsonSchema;
use serde::de::DeserializeOwned;
use serde::Serialize;
use serde_json::{json, Map, Value};

/// One JSON-RPC method, as a type: its name, what it takes and what it answers.
pub trait Method {
    /// The method's name on the wire.
    const NAME: &'static str;
    /// The params object (by name).
    type Params: Serialize + DeserializeOwned + JsonSchema;
    /// The result.
    type Result: Serialize + DeserializeOwned + JsonSchema;
}

/// Where a method's work runs in the daemon.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Runs {
    /// On the async runtime: cheap reads of state held in memory, answered at once.
    Inline,
    /// On a blocking thread, outside the compute slots: short file work that must not wait
    /// behind analyses (dropping a dataset).
    Blocking,
    /// On a blocking thread holding one of the daemon's compute slots: CPU- or file-heavy work.
    InComputeSlot,
    /// A subscription (WebSocket and stdio only).
    Subscription,
}

/// How a method takes its params.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ParamStructure {
    ByName,
    ByPosition,
}

impl ParamStructure {
    /// The OpenRPC `paramStructure` word.
    pub fn name(self) -> &'static str {
        match self {
            ParamStructure::ByName => "by-name",
            ParamStructure::ByPosition => "by-position",
        }
    }
}

/// The longest deadline a request may ask for: a day.
pub const MAX_DEADLINE_S: f64 = 86_400.0;

/// A method that takes `deadline_s`: its default and what a passed deadline leaves behind.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Deadline {
    /// Seconds when the request gives none.
    pub default_s: u32,
    /// Appended to the parameter's description: what is kept when it passes.
    pub on_expiry: &'static str,
}

/// One method of the table.
pub struct MethodSpec {
    pub name: &'static str,
    pub summary: &'static str,
    params: fn() -> Value,
    result: fn() -> Value,
    pub structure: ParamStructure,
    pub runs: Runs,
    /// `Some` if the method takes `deadline_s` (the daemon takes it off the params before
    /// it reads them, so it is not a member of the params type).
    pub deadline: Option<Deadline>,
    /// Whether the method can fail with the daemon's own errors (the cheap reads cannot).
    pub lists_errors: bool,
}

impl MethodSpec {
    /// The JSON Schema of the params object, `deadline_s` included where the method takes it.
    pub fn params_schema(&self) -> Value {
        let mut schema = (self.params)();
        if let Some(deadline) = self.deadline {
            let description = format!(
                "stop after this many seconds with error 5005 deadline_exceeded{} (default {}, at most {})",
                deadline.on_expiry, deadline.default_s, MAX_DEADLINE_S
            );
            let property = json!({
                "type": "number",
                "exclusiveMinimum": 0,
                "maximum": MAX_DEADLINE_S,
                "description": description,
            });
            if let Some(properties) = schema.get_mut("properties").and_then(Value::as_object_mut) {
                properties.insert("deadline_s".into(), property);
            }
        }
        schema
    }

    /// The JSON Schema of the result.
    pub fn result_schema(&self) -> Value {
        (self.result)()
    }

    /// The params, one by one in declaration order: (name, required, schema).
    pub fn params_list(&self) -> Vec<(String, bool, Value)> {
        let schema = self.params_schema();
        let required: Vec<&str> = schema["required"]
            .as_array()
            .map(|names| names.iter().filter_map(Value::as_str).collect())
            .unwrap_or_default();
        schema["properties"]
            .as_object()
            .map(|properties| {
                properties
                    .iter()
                    .map(|(name, sub)| (name.clone(), required.contains(&name.as_str()), sub.clone()))
                    .collect()
            })
            .unwrap_or_default()
    }
}

/// The table entry of `method`.
pub fn method(name: &str) -> Option<&'static MethodSpec> {
    METHODS.iter().find(|m| m.name == name)
}

/// The JSON Schema of `T` as the protocol documents and checks it: draft 2020-12, every
/// subschema inline (no `$ref`, so that a plain validator can walk it), an optional member
/// described by its type alone (absent means the default; `null` is not a value), and no
/// titles (they would be Rust type names).
pub fn schema_of<T: JsonSchema>() -> Value {
    let mut settings = SchemaSettings::draft2020_12();
    settings.inline_subschemas = true;
    settings.meta_schema = None;
    let mut value = settings.into_generator().into_root_schema_for::<T>().to_value();
    tidy(&mut value);
    value
}

/// Drops titles and the `null` alternative schemars gives an `Option` member: on this
/// protocol an optional member is left out, never sent as null.
fn tidy(schema: &mut Value) {
    let Value::Object(map) = schema else {
        return;
    };
    map.remove("title");
    // Doc comments wrap at the source's line width; a description is one paragraph.
    if let Some(Value::String(text)) = map.get_mut("description") {
        *text = text.replace('\n', " ");
    }
    if let Some(Value::Array(types)) = map.get_mut("type") {
        types.retain(|t| t != "null");
        if types.len() == 1 {
            let only = types.remove(0);
            map.insert("type".into(), only);
        }
    }
    if let Some(Value::Array(values)) = map.get_mut("enum") {
        values.retain(|v| !v.is_null());
    }
    for key in ["anyOf", "oneOf"] {
        if let Some(Value::Array(options)) = map.get_mut(key) {
            options.retain(|option| option.get("type") != Some(&json!("null")));
            if options.len() == 1 {
                let Some(Value::Object(only)) = options.pop() else {
                    continue;
                };
                map.remove(key);
                for (name, sub) in only {
                    map.entry(name).or_insert(sub);
                }
            }
        }
    }
    for (key, sub) in map.iter_mut() {
        match key.as_str() {
            "properties" | "$defs" => {
                if let Value::Object(members) = sub {
                    members.values_mut().for_each(tidy);
                }
            }
            "anyOf" | "oneOf" | "allOf" | "prefixItems" => {
                if let Value::Array(options) = sub {
                    options.iter_mut().for_each(tidy);
                }
            }
            "items" | "additionalProperties" | "not" => tidy(sub),
            _ => {}
        }
    }
}

/// An open JSON object whose members the plugins define (an analysis's declaration, the
/// OpenRPC document).
pub type Object = Map<String, Value>;

/// Progress subscription params, by position: `[subscription id]`.
#[derive(Debug, Clone, Serialize, serde::Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Unsubscribe {
    /// the id progress.subscribe returned
    pub subscription: results::SubscriptionId,
}

/// The value given, or the default when none was.
macro_rules! or_default {
    (, $default:expr) => {
        $default
    };
    ($given:expr, $default:expr) => {
        $given
    };
}

/// Builds the method table and the marker types from one entry per method. An entry names
/// what differs between methods; `deadline` (none) and `structure` (by name) may be left
/// out, as most methods take no deadline and every method but one takes its params by name.
macro_rules! methods {
    ($(
        $(#[$doc:meta])*
        $marker:ident = $name:literal ($params:ty) -> $result:ty {
            runs: $runs:ident, $(deadline: $deadline:expr,)? errors: $errors:literal,
            $(structure: $structure:ident,)? summary: $summary:literal $(,)?
        }
    )*) => {
        /// One type per method, to call it with its own params and result types.
        pub mod method {
            use super::*;
            $(
                $(#[$doc])*
                pub enum $marker {}
                impl Method for $marker {
                    const NAME: &'static str = $name;
                    type Params = $params;
                    type Result = $result;
                }
            )*
        }

        /// Every method the daemon serves. The daemon registers exactly these names (its
        /// tests compare them with the registered ones).
        pub const METHODS: &[MethodSpec] = &[$(
            MethodSpec {
                name: $name,
                summary: $summary,
                params: schema_of::<$params>,
                result: schema_of::<$result>,
                structure: or_default!($(ParamStructure::$structure)?, ParamStructure::ByName),
                runs: Runs::$runs,
                deadline: or_default!($($deadline)?, None),
                lists_errors: $errors,
            },
        )*];
    };
}

use params::*;
use results::*;

const RUN_DEADLINE: Option<Deadline> = Some(Deadline {
    default_s: 600,
    on_expiry: ", storing nothing",
});
const PIPELINE_DEADLINE: Option<Deadline> = Some(Deadline {
    default_s: 600,
    on_expiry: "; outputs of steps finished before are kept",
});
const FIGURE_DEADLINE: Option<Deadline> = Some(Deadline {
    default_s: 120,
    on_expiry: "",
});

methods! {
    /// `server.info`
    ServerInfoMethod = "server.info" (NoParams) -> ServerInfo {
        runs: Inline, errors: false,
        summary: "Name, version, plugin ABI version, workspace, data roots, plugins loaded (name, version, isolation) and refused (file, reason), damaged workspace files, memory {stored_bytes, budget_bytes} of the stored tables",
    }
    /// `rpc.discover`
    Discover = "rpc.discover" (NoParams) -> Object {
        runs: Inline, errors: false,
        summary: "This OpenRPC document",
    }
    /// `plugin.list`
    PluginList = "plugin.list" (NoParams) -> Vec<PluginEntry> {
        runs: Inline, errors: false,
        summary: "Each plugin: name, version, library file, analyses, isolation (\"in_process\": in the daemon's process; \"isolated\": in supervised worker processes, where a crash, exit or hang fails one call with 5001)",
    }
    /// `analysis.list`
    AnalysisList = "analysis.list" (NoParams) -> Vec<AnalysisEntry> {
        runs: Inline, errors: false,
        summary: "Each analysis: name, plugin, one-line summary",
    }
    /// `analysis.describe`
    AnalysisDescribe = "analysis.describe" (AnalysisName) -> AnalysisDescription {
        runs: Inline, errors: true,
        summary: "An analysis's parameters (JSON Schema), input roles with their columns and units, output columns and summary keys",
    }
    /// `dataset.import`
    DatasetImport = "dataset.import" (ImportParams) -> DatasetSummary {
        runs: InComputeSlot, errors: true,
        summary: "Stores a table read from a file inside the data roots (CSV, Parquet, Arrow IPC) or sent inline as columns; `rename` renames columns, then `units` converts columns into SI; `csv` describes a CSV file's dialect; a column without any value is stored as numbers (Float64), all missing; `notes` names what was read but may need a change (a mostly numeric column made text by some cells, with their lines)",
    }
    /// `dataset.list`
    DatasetList = "dataset.list" (ListParams) -> DatasetPage {
        runs: Inline, errors: true,
        summary: "A page of the stored datasets in name order: name, rows and column count of each (dataset.info has the columns and provenance); total counts every match, so a client pages with offset until it has them all",
    }
    /// `dataset.info`
    DatasetInfoMethod = "dataset.info" (DatasetName) -> DatasetInfo {
        runs: Inline, errors: true,
        summary: "A dataset's rows, columns, creation time, version (the identity of this stored table, new whenever a table is stored under the name) and provenance (for an analysis output its inputs by name and, as input_versions, the version of each input it read, so that an input dropped or stored again since is told apart; also the run's summary and warnings as answered: run_summary, warnings)",
    }
    /// `dataset.drop`
    DatasetDrop = "dataset.drop" (DatasetName) -> Dropped {
        runs: Blocking, errors: true,
        summary: "Removes a dataset from memory and from the workspace",
    }
    /// `dataset.rows`
    DatasetRows = "dataset.rows" (RowsParams) -> RowsPage {
        runs: InComputeSlot, errors: true,
        summary: "A page of rows as columns of JSON values (SI units; NaN as null)",
    }
    /// `dataset.export`
    DatasetExport = "dataset.export" (ExportParams) -> Exported {
        runs: InComputeSlot, errors: true,
        summary: "Writes a dataset to a file inside the data roots (CSV, Parquet or Arrow IPC)",
    }
    /// `analysis.run`
    AnalysisRun = "analysis.run" (RunParams) -> RunResult {
        runs: InComputeSlot, deadline: RUN_DEADLINE, errors: true,
        summary: "Runs an analysis on stored datasets and stores its output table; with group_by, once per group of the first input, outputs concatenated and one summary per group",
    }
    /// `analysis.cancel`
    AnalysisCancel = "analysis.cancel" (CallId) -> CancelResult {
        runs: Inline, errors: true,
        summary: "Asks a running analysis.run (by its call_id) to stop; the run then fails with the cancelled error",
    }
    /// `analysis.progress`
    AnalysisProgress = "analysis.progress" (CallId) -> ProgressState {
        runs: Inline, errors: true,
        summary: "The progress last reported by a running analysis.run (by its call_id)",
    }
    /// `pipeline.run`
    PipelineRun = "pipeline.run" (PipelineParams) -> PipelineResult {
        runs: InComputeSlot, deadline: PIPELINE_DEADLINE, errors: true,
        summary: "Runs analysis.run steps in order; a step may name an earlier step's output. Every step is checked before the first runs (analysis, input roles and datasets, output names, parameters against the analysis's schema), and no step may write onto a stored dataset a step reads; what depends on an earlier step's output (its columns and values) is checked when the step runs, and steps that ran before a failing one stay stored",
    }
    /// `plot.render`
    PlotRender = "plot.render" (PlotParams) -> Figure {
        runs: InComputeSlot, deadline: FIGURE_DEADLINE, errors: true,
        summary: "Draws a stored dataset: SVG drawn by the daemon and the same figure as a Vega-Lite v5 specification. Without `kind`, the figure suits the analysis that produced the dataset (see plot.kinds); axes in the customary units of the trade, uncertainties as error bars",
    }
    /// `plot.kinds`
    PlotKinds = "plot.kinds" (DatasetFilter) -> Vec<PlotKind> {
        runs: Inline, errors: true,
        summary: "The figures plot.render can draw, each with the analyses whose outputs it draws; with `dataset`, only those that apply to it",
    }
    /// `report.samples`
    ReportSamples = "report.samples" (NoParams) -> Vec<ReportSample> {
        runs: Inline, errors: false,
        summary: "Every sample named in a `sample` column of a stored dataset (or, for an analysis output without that column, by its run summary's `sample`, or else the one sample its inputs hold: an ungrouped run over one sample's series), with the datasets that hold it",
    }
    /// `report.render`
    ReportRender = "report.render" (SampleName) -> Report {
        runs: InComputeSlot, deadline: FIGURE_DEADLINE, errors: true,
        summary: "One self-contained HTML page for a sample: first its results (each analysis's key numbers with uncertainties, fit quality and flags, from the stored run summaries), then every dataset holding it, in the order the work went, with figures (inline SVG), key columns first, the full table behind a disclosure and as a CSV download, quality flags, and provenance (source files, analyses, parameters, plugin and daemon versions); prints on A4 and Letter",
    }
    /// `progress.subscribe`
    ProgressSubscribe = "progress.subscribe" (CallId) -> SubscriptionId {
        runs: Subscription, errors: true,
        summary: "WebSocket and stdio only: subscribes to the progress of the call with this call_id (subscribe before starting the call). The daemon sends `progress.event` notifications, params {subscription, result: event}, where event is {call_id, kind: \"begin\", title}, then {call_id, kind: \"report\", fraction 0-1, message} at most every 100 ms, then {call_id, kind: \"end\", outcome: \"done\"|\"failed\"|\"cancelled\", message?}, after which the subscription is over. A call that ended recently answers with its end event at once",
    }
    /// `progress.unsubscribe`
    ProgressUnsubscribe = "progress.unsubscribe" (Unsubscribe) -> bool {
        runs: Subscription, errors: true, structure: ByPosition,
        summary: "Ends a progress subscription early; params by position: [subscription id]",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn method_names_are_unique_and_every_params_schema_is_an_object() {
        let mut names: Vec<&str> = METHODS.iter().map(|m| m.name).collect();
        names.sort();
        names.dedup();
        assert_eq!(names.len(), METHODS.len());
        for method in METHODS {
            let schema = method.params_schema();
            assert_eq!(schema["type"], "object", "{}: {schema}", method.name);
            assert!(!schema.to_string().contains("$ref"), "{}: {schema}", method.name);
            assert!(schema.get("title").is_none(), "{}: {schema}", method.name);
            assert!(!schema.to_string().contains("\\n"), "{}: {schema}", method.name);
        }
    }

    #[test]
    fn optional_members_are_not_nullable_and_deadlines_are_documented() {
        let run = method("analysis.run").unwrap();
        let list = run.params_list();
        let names: Vec<&str> = list.iter().map(|(name, _, _)| name.as_str()).collect();
        assert_eq!(
            names,
            [
                "analysis",
                "inputs",
                "params",
                "output",
                "group_by",
                "group_tolerance",
                "overwrite",
                "call_id",
                "summary_output",
                "deadline_s"
            ]
        );
        let required: Vec<&str> = list.iter().filter(|p| p.1).map(|p| p.0.as_str()).collect();
        assert_eq!(required, ["analysis", "inputs", "output"]);
        assert_eq!(list[7].2["type"], "string", "{}", list[7].2);
        // A tolerance per column: an object of numbers, not nullable.
        assert_eq!(list[5].2["type"], "object", "{}", list[5].2);
        assert_eq!(list[5].2["additionalProperties"]["type"], "number", "{}", list[5].2);
        let schema = method("pipeline.run").unwrap().params_schema();
        assert_eq!(schema["properties"]["steps"]["minItems"], 1);
        assert_eq!(
            schema["properties"]["steps"]["items"]["properties"]["analysis"]["type"],
            "string"
        );
        assert!(schema["properties"]["steps"]["items"]["properties"]
            .get("deadline_s")
            .is_none());
    }

    /// The daemon once wrote these answers as JSON literals; the types must put the same
    /// members on the wire, in the same order, and leave out what was left out.
    #[test]
    fn typed_answers_keep_the_wire_shape() {
        // Through `serde_json::Value`, as the daemon answers.
        fn text<T: Serialize>(value: &T) -> String {
            serde_json::to_value(value).unwrap().to_string()
        }
        let figure = Figure {
            dataset: "d".into(),
            kind: "columns".into(),
            title: "t".into(),
            svg: None,
            vega_lite: Some(json!({"mark": "point"})),
        };
        assert_eq!(
            text(&figure),
            r#"{"dataset":"d","kind":"columns","title":"t","vega_lite":{"mark":"point"}}"#
        );
        let grouped = GroupedSummary {
            groups: vec![GroupSummary {
                group: json!({"sample": "W1", "temperature_K": 300.0})
                    .as_object()
                    .unwrap()
                    .clone(),
                summary: json!({"n": 1}),
                warnings: vec!["w".into()],
            }],
        };
        assert_eq!(
            text(&grouped),
            r#"{"groups":[{"group":{"sample":"W1","temperature_K":300.0},"summary":{"n":1},"warnings":["w"]}]}"#
        );
        let described = AnalysisDescription {
            declaration: json!({"name": "a.b", "summary": "s"}).as_object().unwrap().clone(),
            plugin: PluginIdentity {
                name: "a".into(),
                version: "1".into(),
            },
        };
        let wire = text(&described);
        assert_eq!(
            wire,
            r#"{"name":"a.b","summary":"s","plugin":{"name":"a","version":"1"}}"#
        );
        let back: AnalysisDescription = serde_json::from_str(&wire).unwrap();
        assert_eq!(back.plugin.name, "a");
        assert!(!back.declaration.contains_key("plugin"));
        let sample = ReportSample {
            sample: "W1".into(),
            datasets: vec!["raw".into()],
        };
        assert_eq!(text(&sample), r#"{"sample":"W1","datasets":["raw"]}"#);
        let report = Report {
            sample: "W1".into(),
            datasets: vec![],
            figures: 2,
            html: "<p>".into(),
        };
        assert_eq!(
            text(&report),
            r#"{"sample":"W1","datasets":[],"figures":2,"html":"<p>"}"#
        );
        let kind = PlotKind {
            name: "k".into(),
            description: "d".into(),
            analyses: vec![],
        };
        assert_eq!(text(&kind), r#"{"name":"k","description":"d","analyses":[]}"#);
        // rpc.discover documents both shapes of a run's summary.
        let run = method("analysis.run").unwrap().result_schema();
        let shapes = run["properties"]["summary"]["anyOf"].as_array().unwrap();
        assert_eq!(shapes[0]["required"], json!(["groups"]));
        let describe = method("analysis.describe").unwrap().result_schema();
        assert_eq!(describe["required"], json!(["plugin"]));
    }

    #[test]
    fn params_and_results_round_trip() {
        let run = RunParams {
            analysis: "hall.reduce".into(),
            inputs: [("readings".to_owned(), "raw".to_owned())].into(),
            output: "out".into(),
            ..Default::default()
        };
        let text = serde_json::to_value(&run).unwrap();
        assert_eq!(
            text,
            json!({"analysis": "hall.reduce", "inputs": {"readings": "raw"}, "output": "out"})
        );
        let event: ProgressEvent =
            serde_json::from_value(json!({"call_id": "c", "kind": "end", "outcome": "done"})).unwrap();
        assert_eq!(event.call_id(), "c");
        assert!(matches!(
            event,
            ProgressEvent::End {
                outcome: Outcome::Done,
                ..
            }
        ));
    }
}
