//! The OpenRPC document served by `rpc.discover`, generated from the protocol's method
//! table and derived schemas ([`mobilis_protocol::METHODS`]) and from the loaded plugins'
//! declarations.
//!
//! **Architecture Invariant.** No schema is written here: each method's params and result
//! schemas are the protocol types' own, and the server registers exactly the table's names
//! (a test compares them with the registered module), so the document cannot drift from
//! the code.
//!
//! An analysis's own parameters depend on the plugins loaded, so they sit in
//! `components.schemas` as `<analysis>.params`, and the content descriptor of
//! `analysis.run`'s `params` (and of `pipeline.run`'s `steps`) carries `x-analyses`, a map
//! from analysis name to a `$ref` to that schema. A map keyed by the name a client already
//! holds is one lookup; a `oneOf` over the parameter objects could not say which branch
//! belongs to which analysis, since the name is a sibling member, not part of `params`.
//! OpenRPC 1.3 allows `x-` extensions on every object.

use crate::errors::ErrorKind;
use crate::service::Service;
use serde_json::{json, Map, Value};

/// The OpenRPC version the document follows.
pub const OPENRPC_VERSION: &str = "1.3.2";

/// The content descriptors of a method's params, in declaration order.
/// Required ones first, as OpenRPC asks of a method's params list.
fn param_descriptors(spec: &mobilis_protocol::MethodSpec, analyses: &Value) -> Vec<Value> {
    let mut params = spec.params_list();
    params.sort_by_key(|(_, required, _)| !required);
    params
        .into_iter()
        .map(|(name, required, schema)| {
            let description = schema["description"].as_str().unwrap_or_default().to_owned();
            let mut descriptor = json!({
                "name": name,
                "required": required,
                "description": description,
                "schema": schema,
            });
            let per_analysis = matches!(
                (spec.name, name.as_str()),
                ("analysis.run", "params") | ("pipeline.run", "steps")
            );
            if per_analysis {
                descriptor["x-analyses"] = analyses.clone();
            }
            descriptor
        })
        .collect()
}

/// The OpenRPC document of this daemon with its plugins.
pub fn document(service: &Service) -> Map<String, Value> {
    let errors: Vec<Value> = ErrorKind::ALL
        .iter()
        .map(|kind| json!({ "code": kind.code(), "message": kind.description(), "data": { "kind": kind.name() } }))
        .collect();
    let mut schemas = Map::new();
    let mut analyses = Map::new();
    for (name, entry) in &service.host.analyses {
        let mut schema = entry.declaration.params.clone();
        if let Value::Object(map) = &mut schema {
            map.insert(
                "description".into(),
                json!(format!("parameters of {name}: {}", entry.declaration.summary)),
            );
        }
        let key = format!("{name}.params");
        analyses.insert(name.clone(), json!({ "$ref": format!("#/components/schemas/{key}") }));
        schemas.insert(key, schema);
    }
    let analyses = Value::Object(analyses);
    let methods: Vec<Value> = mobilis_protocol::METHODS
        .iter()
        .map(|spec| {
            let mut entry = json!({
                "name": spec.name,
                "summary": spec.summary,
                "paramStructure": spec.structure.name(),
                "params": param_descriptors(spec, &analyses),
                "result": { "name": "result", "schema": spec.result_schema() },
            });
            if spec.lists_errors {
                entry["errors"] = Value::Array(errors.clone());
            }
            entry
        })
        .collect();
    let document = json!({
        "openrpc": OPENRPC_VERSION,
        "info": {
            "title": "mobilisd",
            "version": env!("CARGO_PKG_VERSION"),
            "description": "Analysis server for semiconductor transport measurements. Analyses come from plugins; their parameter schemas are in components.schemas as `<analysis>.params`, and analysis.run's `params` (pipeline.run's `steps`) lists them by analysis name under x-analyses. An error's data holds its kind, often a help line, and, when one request parameter is at fault, its path as param (`output`, `inputs.readings`, `params.temperature_tolerance_K`, `group_by`).",
        },
        "methods": methods,
        "components": { "schemas": schemas },
    });
    match document {
        Value::Object(map) => map,
        _ => unreachable!("the document is an object"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_document_is_openrpc_and_documents_the_run_parameters() {
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::without_plugins(workspace.path());
        let document = Value::Object(document(&service));
        if let Err(problems) = mobilis_protocol::openrpc::check_document(&document) {
            panic!("{}", problems.join("\n"));
        }
        let run = document["methods"]
            .as_array()
            .unwrap()
            .iter()
            .find(|m| m["name"] == "analysis.run")
            .unwrap();
        let names: Vec<&str> = run["params"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p["name"].as_str().unwrap())
            .collect();
        assert_eq!(names[..3], ["analysis", "inputs", "output"]);
        for param in run["params"].as_array().unwrap() {
            let schema = &param["schema"];
            assert!(schema.get("type").is_some() || schema.get("anyOf").is_some(), "{param}");
        }
        assert_eq!(run["params"][3]["x-analyses"], json!({}));
        // Every documented schema is one the daemon's own validator implements.
        for method in document["methods"].as_array().unwrap() {
            for param in method["params"].as_array().unwrap() {
                mobilis_sdk::param_schema::check_supported(&param["schema"], param["name"].as_str().unwrap()).unwrap();
            }
        }
    }
}
