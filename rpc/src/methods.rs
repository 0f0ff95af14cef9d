//! The JSON-RPC methods: parameter parsing, error conversion, dispatch into [`Service`].
//! Every method, its params and result types and where it runs come from the protocol's
//! table ([`mobilis_protocol::METHODS`]); this module binds each to the service.
//!
//! **Architecture Invariant.** This module and `transport` are the only ones that know
//! jsonrpsee. CPU- and file-bound methods run off the async runtime, at most one per core
//! ([`crate::compute_slots`]), so that a long analysis never stalls other clients and cheap
//! calls never queue behind analyses.
//!
//! **Messages speak the documentation's words.** Before a method runs, its params are checked
//! against its entry in `openrpc::METHODS` (`check_params`): not an object, a missing or
//! unknown parameter, a wrong type or a value out of range is a 4001 naming the method and the
//! parameter (`dataset.rows: offset must be at least 0 (got -1)`), with a help line listing
//! what the method takes. Types read as "an object", "a list", "text", "a whole number"; a
//! parameter's choices as "svg, vega-lite or both". What the deserializer still reports (a
//! count too large for the machine, say) passes through [`plain_words`], which removes Rust
//! type names. A unit test sends malformed params to every documented method and fails on
//! `struct `, `enum `, `usize`, `u64`, `f64`, `::`, `serde` or a type name of the crate.

use crate::bounded_calls;
use crate::compute_slots::ComputeSlots;
use crate::errors::ServiceError;
use crate::errors::ServiceResult;
use crate::openrpc;
use crate::service::Service;
use jsonrpsee::types::{ErrorObjectOwned, Params};
use jsonrpsee::RpcModule;
use mobilis_protocol::{method, params, Method, Runs};
use serde::{Deserialize, Serialize};
use serde_json::Value;
use std::collections::HashMap;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::{Arc, OnceLock};

fn to_rpc_error(error: ServiceError) -> ErrorObjectOwned {
    ErrorObjectOwned::owned(error.kind.code(), error.message.clone(), Some(error.data()))
}

/// The params of a request as JSON; a missing params member, or an empty array, counts as `{}`.
fn params_value(params: &Params) -> Result<Value, ErrorObjectOwned> {
    let value: Value = if params.as_str().is_none() {
        Value::Object(Default::default())
    } else {
        params.parse()?
    };
    Ok(match value {
        Value::Array(items) if items.is_empty() => Value::Object(Default::default()),
        other => other,
    })
}

/// The JSON Schema of a method's params object, derived once from its protocol type.
fn params_schema(method: &str) -> Option<&'static Value> {
    static SCHEMAS: OnceLock<HashMap<&'static str, Value>> = OnceLock::new();
    SCHEMAS
        .get_or_init(|| {
            mobilis_protocol::METHODS
                .iter()
                .map(|spec| (spec.name, spec.params_schema()))
                .collect()
        })
        .get(method)
}

/// What a method takes, for help lines: `name (required): what it is; offset: ...`.
fn params_summary(method: &str) -> String {
    let Some(schema) = params_schema(method) else {
        return String::new();
    };
    let Some(properties) = schema["properties"].as_object().filter(|p| !p.is_empty()) else {
        return format!("{method} takes no parameters");
    };
    let required: Vec<&str> = schema["required"]
        .as_array()
        .map(|names| names.iter().filter_map(Value::as_str).collect())
        .unwrap_or_default();
    let listed: Vec<String> = properties
        .iter()
        .map(|(name, sub)| {
            let description = sub["description"].as_str().unwrap_or("");
            let required = if required.contains(&name.as_str()) {
                " (required)"
            } else {
                ""
            };
            format!("{name}{required}: {description}")
        })
        .collect();
    format!("{method} takes, by name: {}", listed.join("; "))
}

/// Checks a request's params against the method's documented parameters, so that a
/// mistake is reported in the words of the documentation: which parameter, what it takes.
fn check_params(method: &str, params: &Params) -> Result<(), ErrorObjectOwned> {
    let value = params_value(params)?;
    let Some(schema) = params_schema(method) else {
        return Ok(());
    };
    if !value.is_object() {
        return Err(to_rpc_error(
            ServiceError::invalid_params(format!(
                "{method} takes its parameters by name, as a JSON object, not as {}",
                json_kind(&value)
            ))
            .with_help(params_summary(method)),
        ));
    }
    let refuse = |message: String| {
        to_rpc_error(ServiceError::invalid_params(format!("{method}: {message}")).with_help(params_summary(method)))
    };
    // Top-level choices read as a list of words: `format must be svg, vega-lite or both`.
    for (name, given) in value.as_object().into_iter().flatten() {
        let Some(Value::Array(allowed)) = schema["properties"][name].get("enum") else {
            continue;
        };
        if !allowed.contains(given) {
            let words: Vec<String> = allowed
                .iter()
                .map(|v| v.as_str().map(str::to_owned).unwrap_or_else(|| v.to_string()))
                .collect();
            let listed = match words.split_last() {
                Some((last, rest)) if !rest.is_empty() => format!("{} or {last}", rest.join(", ")),
                _ => words.join(""),
            };
            return Err(refuse(format!("{name} must be {listed} (got {given})")));
        }
    }
    mobilis_sdk::param_schema::validate(schema, &value).map_err(|message| {
        let message = message.strip_prefix("params.").unwrap_or(&message);
        refuse(plain_schema_words(&message.replace("params.", "")))
    })
}

/// The validator's type names in plain words: `must be an object (got a list)`.
fn plain_schema_words(message: &str) -> String {
    let mut text = message.to_owned();
    for (schema_word, plain) in [
        ("object", "an object"),
        ("array", "a list"),
        ("string", "text"),
        ("integer", "a whole number"),
        ("number", "a number"),
        ("boolean", "true or false"),
        ("null", "null"),
    ] {
        text = text
            .replace(&format!("must be {schema_word}"), &format!("must be {plain}"))
            .replace(&format!("or {schema_word}"), &format!("or {plain}"))
            .replace(&format!("(got {schema_word})"), &format!("(got {plain})"));
    }
    text
}

fn json_kind(value: &Value) -> &'static str {
    match value {
        Value::Null => "null",
        Value::Bool(_) => "a boolean",
        Value::Number(_) => "a number",
        Value::String(_) => "text",
        Value::Array(_) => "a list",
        Value::Object(_) => "an object",
    }
}

/// Parses by-name parameters (checked before by [`check_params`]); a missing params member
/// counts as `{}`.
fn parse<T: for<'de> Deserialize<'de>>(params: &Params) -> Result<T, ErrorObjectOwned> {
    let value = params_value(params)?;
    serde_json::from_value(value).map_err(|error| {
        to_rpc_error(
            ServiceError::invalid_params(format!("invalid parameters: {}", plain_words(&error.to_string())))
                .with_help("see rpc.discover for each method's parameters"),
        )
    })
}

/// A deserializer's message without the names of Rust types (`struct NameParam`, `untagged
/// enum UnitSpec`, `usize`), which mean nothing to the person who sent the request.
pub fn plain_words(message: &str) -> String {
    let message = match message.find(" at line ") {
        Some(at) => &message[..at],
        None => message,
    };
    let message = message.replace(
        "data did not match any variant of untagged enum",
        "the value has none of the accepted forms: enum",
    );
    let words: Vec<&str> = message.split(' ').collect();
    let mut out: Vec<String> = Vec::with_capacity(words.len());
    let mut index = 0;
    while index < words.len() {
        let word = words[index];
        let bare = word.trim_end_matches([',', ';', ')']);
        let tail = &word[bare.len()..];
        match bare {
            "struct" | "enum"
                if words
                    .get(index + 1)
                    .is_some_and(|next| next.chars().next().is_some_and(char::is_uppercase)) =>
            {
                // Drop the keyword and the type name after it.
                let name = words[index + 1];
                let name_bare = name.trim_end_matches([',', ';', ')']);
                let name_tail = &name[name_bare.len()..];
                if bare == "struct" {
                    out.push(format!("an object{name_tail}"));
                } else if out.last().map(String::as_str) == Some("forms:") {
                    out.pop();
                    out.push(format!("forms{name_tail}"));
                } else {
                    out.push(format!("one of the accepted values{name_tail}"));
                }
                index += 2;
                continue;
            }
            "usize" | "u64" | "u32" | "u16" | "u8" => out.push(format!("a whole number of 0 or more{tail}")),
            "isize" | "i64" | "i32" | "i16" | "i8" => out.push(format!("a whole number{tail}")),
            "f64" | "f32" => out.push(format!("a number{tail}")),
            "map" => out.push(format!("an object{tail}")),
            "sequence" => out.push(format!("a list{tail}")),
            _ => out.push(word.replace("::", ".")),
        }
        index += 1;
    }
    out.join(" ")
}

/// Runs a service call, turning a panic in the daemon into an error instead of a dropped connection.
fn guarded<T>(call: impl FnOnce() -> Result<T, ServiceError>) -> Result<T, ErrorObjectOwned> {
    match catch_unwind(AssertUnwindSafe(call)) {
        Ok(result) => result.map_err(to_rpc_error),
        Err(_) => Err(to_rpc_error(ServiceError::new(
            crate::errors::ErrorKind::PluginFailure,
            "internal error while handling the request; the daemon keeps serving and stored datasets are unchanged",
        ))),
    }
}

/// A method bound to the service: params in, result out, both as JSON.
type Handler = Arc<dyn Fn(&Params, &Service) -> Result<Value, ErrorObjectOwned> + Send + Sync>;

/// Binds method `M` to `call`: the params are read as `M`'s params type and the answer is
/// `M`'s result type, so the daemon answers exactly what the protocol documents.
fn typed<M: Method + 'static>(call: fn(M::Params, &Service) -> ServiceResult<M::Result>) -> Handler {
    Arc::new(move |params, service| {
        let params: M::Params = parse(params)?;
        let result = guarded(|| call(params, service))?;
        Ok(serde_json::to_value(result).expect("protocol results serialise"))
    })
}

/// Binds a method whose params the service reads as it likes (`plot.render`: the plotting
/// code reads the figure options itself, the further ones included) but whose result is a
/// protocol type.
fn untyped<P: for<'de> Deserialize<'de> + 'static, R: Serialize + 'static>(
    call: fn(P, &Service) -> ServiceResult<R>,
) -> Handler {
    Arc::new(move |params, service| {
        let params: P = parse(params)?;
        let result = guarded(|| call(params, service))?;
        Ok(serde_json::to_value(result).expect("protocol results serialise"))
    })
}

/// Builds the module with every method of [`mobilis_protocol::METHODS`], heavy calls limited
/// to one per core.
pub fn module(service: Arc<Service>) -> RpcModule<Service> {
    module_with_slots(service, ComputeSlots::per_core())
}

/// Builds the module with every method of [`mobilis_protocol::METHODS`], heavy calls sharing
/// `slots`.
pub fn module_with_slots(service: Arc<Service>, slots: ComputeSlots) -> RpcModule<Service> {
    let mut module = RpcModule::from_arc(service);
    let register = |module: &mut RpcModule<Service>, name: &'static str, f: Handler| {
        let runs = mobilis_protocol::method(name)
            .map(|spec| spec.runs)
            .expect("every bound method is in the protocol table");
        let result = match runs {
            Runs::Inline => module
                .register_method(name, move |params, service, _| {
                    check_params(name, &params)?;
                    f(&params, service)
                })
                .map(|_| ()),
            // Bounded: a deadline, and stopped when the client goes away (see bounded_calls);
            // heavy calls also wait for one of the compute slots.
            Runs::Blocking | Runs::InComputeSlot => {
                let slots = (runs == Runs::InComputeSlot).then(|| slots.clone());
                module
                    .register_async_method(name, move |params, service, _| {
                        let slots = slots.clone();
                        let f = f.clone();
                        async move {
                            // A malformed request is refused at once, without waiting for a slot.
                            check_params(name, &params)?;
                            let (deadline, params) = bounded_calls::take_deadline(name, params)?;
                            bounded_calls::CallScope::new(name, deadline)
                                .run(slots.as_ref(), move || f(&params, &service))
                                .await
                        }
                    })
                    .map(|_| ())
            }
            Runs::Subscription => unreachable!("{name}: subscriptions are registered on their own"),
        };
        result.expect("method names are unique");
    };
    use method::*;
    register(
        &mut module,
        ServerInfoMethod::NAME,
        typed::<ServerInfoMethod>(|_, s| Ok(s.server_info())),
    );
    register(
        &mut module,
        Discover::NAME,
        typed::<Discover>(|_, s| Ok(openrpc::document(s))),
    );
    register(
        &mut module,
        PluginList::NAME,
        typed::<PluginList>(|_, s| Ok(s.plugin_list())),
    );
    register(
        &mut module,
        AnalysisList::NAME,
        typed::<AnalysisList>(|_, s| Ok(s.analysis_list())),
    );
    register(
        &mut module,
        AnalysisDescribe::NAME,
        typed::<AnalysisDescribe>(|p, s| s.analysis_describe(&p.analysis)),
    );
    register(
        &mut module,
        DatasetList::NAME,
        typed::<DatasetList>(|p, s| s.dataset_list(p)),
    );
    register(
        &mut module,
        DatasetInfoMethod::NAME,
        typed::<DatasetInfoMethod>(|p, s| s.dataset_info(&p.name)),
    );
    register(
        &mut module,
        DatasetDrop::NAME,
        typed::<DatasetDrop>(|p, s| s.dataset_drop(&p.name)),
    );
    // Registered as the heavy calls are, but answering with JSON text written straight from
    // the columns (see `rows_json`) rather than with a value built cell by cell.
    let rows_slots = slots.clone();
    module
        .register_async_method(DatasetRows::NAME, move |params, service, _| {
            let slots = rows_slots.clone();
            async move {
                check_params(DatasetRows::NAME, &params)?;
                let (deadline, params) = bounded_calls::take_deadline(DatasetRows::NAME, params)?;
                bounded_calls::CallScope::new(DatasetRows::NAME, deadline)
                    .run(Some(&slots), move || {
                        let p: params::RowsParams = parse(&params)?;
                        guarded(|| service.dataset_rows(p))
                    })
                    .await
            }
        })
        .expect("method names are unique");
    register(
        &mut module,
        DatasetImport::NAME,
        typed::<DatasetImport>(|p, s| s.dataset_import(p)),
    );
    register(
        &mut module,
        DatasetExport::NAME,
        typed::<DatasetExport>(|p, s| s.dataset_export(p)),
    );
    register(
        &mut module,
        AnalysisRun::NAME,
        typed::<AnalysisRun>(|p, s| s.run_analysis(p)),
    );
    register(
        &mut module,
        AnalysisCancel::NAME,
        typed::<AnalysisCancel>(|p, s| Ok(s.cancel(&p.call_id))),
    );
    register(
        &mut module,
        AnalysisProgress::NAME,
        typed::<AnalysisProgress>(|p, s| Ok(s.progress(&p.call_id))),
    );
    register(
        &mut module,
        PipelineRun::NAME,
        typed::<PipelineRun>(|p, s| s.run_pipeline(p)),
    );
    // The plotting code reads the figure options itself, the further ones included.
    register(
        &mut module,
        PlotRender::NAME,
        untyped::<serde_json::Map<String, Value>, _>(|p, s| s.plot_render(p)),
    );
    register(
        &mut module,
        ReportSamples::NAME,
        typed::<ReportSamples>(|_, s| Ok(s.report_samples())),
    );
    register(
        &mut module,
        ReportRender::NAME,
        typed::<ReportRender>(|p, s| s.report_render(&p.sample)),
    );
    register(
        &mut module,
        PlotKinds::NAME,
        typed::<PlotKinds>(|p, s| s.plot_kinds(p.dataset.as_deref())),
    );
    module
        .register_subscription(
            ProgressSubscribe::NAME,
            PROGRESS_NOTIFICATION,
            ProgressUnsubscribe::NAME,
            |params, pending, service, _| async move {
                let call: params::CallId =
                    match check_params(ProgressSubscribe::NAME, &params).and_then(|_| parse(&params)) {
                        Ok(call) => call,
                        Err(error) => {
                            pending.reject(error).await;
                            return Ok(());
                        }
                    };
                let mut events = service.progress_hub.subscribe(&call.call_id);
                let sink = pending.accept().await?;
                loop {
                    tokio::select! {
                        event = events.recv() => {
                            let Some(event) = event else { break };
                            let last = event["kind"] == "end";
                            sink.send(serde_json::value::to_raw_value(&event)?).await?;
                            if last {
                                break;
                            }
                        }
                        _ = sink.closed() => break,
                    }
                }
                Ok(())
            },
        )
        .expect("subscription names are unique");
    module
}

/// The method name of the notifications a progress subscription sends.
pub use mobilis_protocol::PROGRESS_NOTIFICATION;

#[cfg(test)]
mod tests {
    use super::*;

    /// The methods over an empty workspace and no plugins (the workspace lives as long as the
    /// returned directory).
    fn module_without_plugins() -> (tempfile::TempDir, RpcModule<Service>) {
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::without_plugins(workspace.path());
        (workspace, module(Arc::new(service)))
    }

    #[test]
    fn the_openrpc_table_lists_exactly_the_registered_methods() {
        let (_workspace, module) = module_without_plugins();
        let mut registered: Vec<&str> = module.method_names().collect();
        let mut documented: Vec<&str> = mobilis_protocol::METHODS.iter().map(|m| m.name).collect();
        registered.sort();
        documented.sort();
        assert_eq!(registered, documented);
    }

    #[test]
    fn deadlines_and_their_defaults_are_the_protocol_tables() {
        for spec in mobilis_protocol::METHODS {
            let bounded = bounded_calls::DEADLINE_METHODS.contains(&spec.name);
            assert_eq!(bounded, spec.deadline.is_some(), "{}", spec.name);
            if let Some(deadline) = spec.deadline {
                let default = bounded_calls::default_deadline(spec.name).as_secs();
                assert_eq!(default, u64::from(deadline.default_s), "{}", spec.name);
            }
        }
        assert_eq!(bounded_calls::MAX_DEADLINE_S, mobilis_protocol::MAX_DEADLINE_S);
    }

    /// The names of the types this crate and the protocol declare (`ImportParams`, `UnitSpec`, ...).
    fn crate_type_names() -> Vec<String> {
        let manifest = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        let mut directories = vec![manifest.join("src"), manifest.join("../protocol/src")];
        let mut files = Vec::new();
        while let Some(directory) = directories.pop() {
            for entry in std::fs::read_dir(directory).unwrap() {
                let path = entry.unwrap().path();
                if path.is_dir() {
                    directories.push(path);
                } else if path.extension().is_some_and(|e| e == "rs") {
                    files.push(path);
                }
            }
        }
        let mut names = Vec::new();
        for file in files {
            let text = std::fs::read_to_string(file).unwrap();
            let words: Vec<&str> = text.split(|c: char| !(c.is_alphanumeric() || c == '_')).collect();
            for pair in words.windows(2) {
                if matches!(pair[0], "struct" | "enum" | "trait")
                    && pair[1].chars().next().is_some_and(char::is_uppercase)
                {
                    names.push(pair[1].to_owned());
                }
            }
        }
        names.sort();
        names.dedup();
        names
    }

    /// A plausible value of a documented parameter's type, to fill required ones.
    fn plausible(schema: &Value) -> Value {
        match schema["type"].as_str() {
            Some("object") => serde_json::json!({}),
            Some("array") => serde_json::json!([{}]),
            Some("boolean") => serde_json::json!(false),
            Some("integer") | Some("number") => serde_json::json!(1),
            _ => serde_json::json!("x"),
        }
    }

    #[tokio::test(flavor = "multi_thread")]
    async fn malformed_params_get_messages_without_rust_names() {
        use serde_json::json;
        let (_workspace, module) = module_without_plugins();
        let type_names = crate_type_names();
        assert!(type_names.contains(&"ImportParams".to_owned()) && type_names.contains(&"UnitSpec".to_owned()));
        let wrong_values = [
            json!(12.5),
            json!("text"),
            json!(-1),
            json!(true),
            json!([1]),
            json!({"a": 1}),
            json!(null),
            json!(1e30),
        ];
        let mut requests: Vec<(String, Value)> = Vec::new();
        for doc in mobilis_protocol::METHODS {
            let method = doc.name.to_owned();
            let documented = doc.params_list();
            let filled: serde_json::Map<String, Value> = documented
                .iter()
                .filter(|(_, required, _)| *required)
                .map(|(name, _, schema)| (name.clone(), plausible(schema)))
                .collect();
            requests.push((method.clone(), json!([1, 2])));
            requests.push((method.clone(), json!("text")));
            requests.push((method.clone(), json!({})));
            let mut unknown = filled.clone();
            unknown.insert("colour".into(), json!(1));
            requests.push((method.clone(), Value::Object(unknown)));
            for (name, _, _) in &documented {
                for wrong in &wrong_values {
                    let mut params = filled.clone();
                    params.insert(name.clone(), wrong.clone());
                    requests.push((method.clone(), Value::Object(params)));
                }
            }
        }
        // Nested members, and values the documented types let through to the parser.
        let nested = [
            (
                "dataset.import",
                json!({"name": "a", "path": "a.csv", "units": {"T": 5}}),
            ),
            (
                "dataset.import",
                json!({"name": "a", "path": "a.csv", "units": {"T": {"unit": 1}}}),
            ),
            (
                "dataset.import",
                json!({"name": "a", "path": "a.csv", "rename": {"T": 1}}),
            ),
            (
                "dataset.import",
                json!({"name": "a", "path": "a.csv", "csv": {"skip_rows": -1}}),
            ),
            (
                "dataset.import",
                json!({"name": "a", "path": "a.csv", "csv": {"skip_rows": 1e12}}),
            ),
            (
                "dataset.import",
                json!({"name": "a", "path": "a.csv", "csv": {"separator": 5}}),
            ),
            (
                "dataset.import",
                json!({"name": "a", "path": "a.csv", "csv": {"delimiter": ";"}}),
            ),
            ("dataset.import", json!({"name": "a", "columns": {"x": 5}})),
            ("dataset.rows", json!({"name": "a", "limit": 1e30})),
            ("dataset.rows", json!({"name": "a", "offset": 2.5})),
            ("dataset.rows", json!({"name": "a", "offset": 1e300})),
            (
                "pipeline.run",
                json!({"steps": [{"analysis": "a", "inputs": {}, "output": "o", "group_by": 5}]}),
            ),
            (
                "pipeline.run",
                json!({"steps": [{"analysis": "a", "inputs": {"r": 1}, "output": "o"}]}),
            ),
            (
                "pipeline.run",
                json!({"steps": [{"analysis": "a", "inputs": {}, "output": "o", "colour": 1}]}),
            ),
            ("pipeline.run", json!({"steps": [5]})),
            (
                "analysis.run",
                json!({"analysis": "a", "inputs": {}, "output": "o", "group_by": [1]}),
            ),
            ("plot.render", json!({"dataset": "a", "width": "wide"})),
            ("plot.render", json!({"dataset": "a", "colour": 1})),
        ];
        requests.extend(nested.into_iter().map(|(m, p)| (m.to_owned(), p)));
        let forbidden = ["struct ", "enum ", "usize", "u64", "f64", "::", "serde"];
        let mut checked = 0;
        for (id, (method, params)) in requests.iter().enumerate() {
            let request = json!({"jsonrpc": "2.0", "id": id, "method": method, "params": params}).to_string();
            let (response, _) = module.raw_json_request(&request, 16).await.unwrap();
            let response: Value = serde_json::from_str(response.get()).unwrap();
            let Some(error) = response.get("error") else { continue };
            let text = format!("{} {}", error["message"].as_str().unwrap_or(""), error["data"]);
            for word in forbidden {
                assert!(!text.contains(word), "{method} {params}: `{word}` in {text}");
            }
            let words: Vec<&str> = text.split(|c: char| !(c.is_alphanumeric() || c == '_')).collect();
            for name in &type_names {
                assert!(
                    !words.contains(&name.as_str()),
                    "{method} {params}: type name `{name}` in {text}"
                );
            }
            checked += 1;
        }
        assert!(checked > 400, "only {checked} requests failed");
        // The messages name the parameter and what it takes.
        let answer = |method: &str, params: Value| {
            let request = json!({"jsonrpc": "2.0", "id": 1, "method": method, "params": params}).to_string();
            let module = &module;
            async move {
                let (response, _) = module.raw_json_request(&request, 16).await.unwrap();
                let response: Value = serde_json::from_str(response.get()).unwrap();
                response["error"]["message"].as_str().unwrap_or("").to_owned()
            }
        };
        assert_eq!(
            answer("dataset.rows", json!({"name": "a", "offset": -1})).await,
            "dataset.rows: offset must be at least 0 (got -1)"
        );
        assert_eq!(
            answer("dataset.info", json!({})).await,
            "dataset.info: name is required"
        );
        assert!(answer("dataset.info", json!({"name": "a", "colour": 1}))
            .await
            .starts_with("dataset.info: colour is not a known parameter; known: name"));
        assert_eq!(
            answer("dataset.info", json!([1])).await,
            "dataset.info takes its parameters by name, as a JSON object, not as a list"
        );
        let offset = answer("dataset.rows", json!({"name": "a", "offset": 1e300})).await;
        assert!(offset.contains("a whole number of 0 or more"), "{offset}");
        let group_by = answer(
            "pipeline.run",
            json!({"steps": [{"analysis": "a", "inputs": {}, "output": "o", "group_by": 5}]}),
        )
        .await;
        assert!(
            group_by.starts_with("pipeline.run: steps[0].group_by matches none of the allowed forms"),
            "{group_by}"
        );
    }

    #[test]
    fn deserializer_messages_lose_their_rust_names() {
        assert_eq!(
            plain_words("invalid type: sequence, expected struct NameParam at line 1 column 2"),
            "invalid type: a list, expected an object"
        );
        assert_eq!(
            plain_words("data did not match any variant of untagged enum UnitSpec"),
            "the value has none of the accepted forms"
        );
        assert_eq!(
            plain_words("invalid type: floating point `1e300`, expected usize"),
            "invalid type: floating point `1e300`, expected a whole number of 0 or more"
        );
        assert_eq!(
            plain_words("unknown variant `x`, expected enum FileFormat"),
            "unknown variant `x`, expected one of the accepted values"
        );
    }

    #[tokio::test(flavor = "multi_thread")]
    async fn dataset_list_answers_pages_in_name_order() {
        use serde_json::json;
        let (_workspace, module) = module_without_plugins();
        let call = |method: &str, params: Value| {
            let request = json!({"jsonrpc": "2.0", "id": 1, "method": method, "params": params}).to_string();
            let module = &module;
            async move {
                let (response, _) = module.raw_json_request(&request, 16).await.unwrap();
                serde_json::from_str::<Value>(response.get()).unwrap()
            }
        };
        for name in ["run-b", "run-a", "other", "run-c", "run-e", "run-d"] {
            let stored = call(
                "dataset.import",
                json!({"name": name, "columns": {"x": [1.0, 2.0], "y": [3, 4]}}),
            )
            .await;
            assert!(stored.get("result").is_some(), "{stored}");
        }
        let names = |answer: &Value| -> Vec<String> {
            answer["result"]["datasets"]
                .as_array()
                .unwrap()
                .iter()
                .map(|d| d["name"].as_str().unwrap().to_owned())
                .collect()
        };
        let all = call("dataset.list", json!({})).await;
        assert_eq!(all["result"]["total"], 6);
        assert_eq!(names(&all), ["other", "run-a", "run-b", "run-c", "run-d", "run-e"]);
        assert_eq!(
            all["result"]["datasets"][0],
            json!({"name": "other", "rows": 2, "column_count": 2})
        );

        let second = call("dataset.list", json!({"prefix": "run-", "offset": 2, "limit": 2})).await;
        assert_eq!(second["result"]["total"], 5);
        assert_eq!(second["result"]["offset"], 2);
        assert_eq!(names(&second), ["run-c", "run-d"]);
        let past_the_end = call("dataset.list", json!({"offset": 100})).await;
        assert_eq!(past_the_end["result"]["total"], 6);
        assert!(names(&past_the_end).is_empty());

        let too_many = call("dataset.list", json!({"limit": 5001})).await;
        assert_eq!(too_many["error"]["code"], 4001, "{too_many}");
        let message = too_many["error"]["message"].as_str().unwrap();
        assert!(message.contains("limit") && message.contains("5000"), "{message}");
        let unknown = call("dataset.list", json!({"page": 2})).await;
        assert_eq!(unknown["error"]["code"], 4001, "{unknown}");
        // Asked directly, past the schema, the service refuses the same way and says what to do.
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::without_plugins(workspace.path());
        let service_refusal = service
            .dataset_list(crate::service::ListParams {
                limit: Some(6000),
                ..Default::default()
            })
            .unwrap_err();
        assert!(service_refusal.help.unwrap().contains("offset"));
    }
}
