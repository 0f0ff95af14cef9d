//! A structural check of an OpenRPC 1.x document (the OpenRPC Specification 1.3.2,
//! <https://spec.open-rpc.org>): the fixed fields of the document, info, method, content
//! descriptor and error objects with their types, unique method and parameter names,
//! required parameters before optional ones, `x-` extensions only, and every local
//! `$ref` resolving. It checks the shape a client relies on, not the JSON Schemas inside.

use serde_json::{Map, Value};

const DOCUMENT_FIELDS: [&str; 6] = ["openrpc", "info", "servers", "methods", "components", "externalDocs"];
const INFO_FIELDS: [&str; 6] = [
    "title",
    "description",
    "termsOfService",
    "version",
    "contact",
    "license",
];
const METHOD_FIELDS: [&str; 13] = [
    "name",
    "tags",
    "summary",
    "description",
    "externalDocs",
    "params",
    "result",
    "deprecated",
    "servers",
    "errors",
    "links",
    "paramStructure",
    "examples",
];
const DESCRIPTOR_FIELDS: [&str; 6] = ["name", "summary", "description", "required", "schema", "deprecated"];
const ERROR_FIELDS: [&str; 3] = ["code", "message", "data"];

/// Every problem found in `document`, or `Ok` if there is none.
pub fn check_document(document: &Value) -> Result<(), Vec<String>> {
    let mut problems = Vec::new();
    let Some(root) = document.as_object() else {
        return Err(vec!["the document is not an object".into()]);
    };
    fixed_fields(root, &DOCUMENT_FIELDS, "document", &mut problems);
    match root.get("openrpc").and_then(Value::as_str) {
        Some(version) if version.starts_with("1.") && version.split('.').count() == 3 => {}
        other => problems.push(format!("openrpc must be a 1.x.y version string (got {other:?})")),
    }
    match root.get("info").and_then(Value::as_object) {
        Some(info) => {
            fixed_fields(info, &INFO_FIELDS, "info", &mut problems);
            for field in ["title", "version"] {
                if !info.get(field).is_some_and(Value::is_string) {
                    problems.push(format!("info.{field} must be text"));
                }
            }
        }
        None => problems.push("info must be an object".into()),
    }
    let Some(methods) = root.get("methods").and_then(Value::as_array) else {
        problems.push("methods must be a list".into());
        return Err(problems);
    };
    let mut names = Vec::new();
    for (index, method) in methods.iter().enumerate() {
        let Some(method) = method.as_object() else {
            problems.push(format!("methods[{index}] is not an object"));
            continue;
        };
        let Some(name) = method.get("name").and_then(Value::as_str) else {
            problems.push(format!("methods[{index}].name must be text"));
            continue;
        };
        if names.contains(&name) {
            problems.push(format!("method {name} is listed twice"));
        }
        names.push(name);
        fixed_fields(method, &METHOD_FIELDS, name, &mut problems);
        if let Some(structure) = method.get("paramStructure") {
            if !matches!(structure.as_str(), Some("by-name" | "by-position" | "either")) {
                problems.push(format!("{name}.paramStructure must be by-name, by-position or either"));
            }
        }
        match method.get("params").and_then(Value::as_array) {
            Some(params) => {
                let mut param_names = Vec::new();
                let mut optional_seen = false;
                for (position, param) in params.iter().enumerate() {
                    let path = format!("{name}.params[{position}]");
                    descriptor(param, &path, &mut problems);
                    let param_name = param.get("name").and_then(Value::as_str).unwrap_or_default();
                    if param_names.contains(&param_name) {
                        problems.push(format!("{path}: parameter {param_name} is listed twice"));
                    }
                    param_names.push(param_name);
                    let required = param.get("required").and_then(Value::as_bool).unwrap_or(false);
                    if required && optional_seen {
                        problems.push(format!("{path}: required {param_name} follows an optional parameter"));
                    }
                    optional_seen |= !required;
                }
            }
            None => problems.push(format!("{name}.params must be a list")),
        }
        match method.get("result") {
            Some(result) => descriptor(result, &format!("{name}.result"), &mut problems),
            None => problems.push(format!("{name} has no result")),
        }
        if let Some(errors) = method.get("errors") {
            for (position, error) in errors.as_array().into_iter().flatten().enumerate() {
                let path = format!("{name}.errors[{position}]");
                let Some(error) = error.as_object() else {
                    problems.push(format!("{path} is not an object"));
                    continue;
                };
                fixed_fields(error, &ERROR_FIELDS, &path, &mut problems);
                if !error.get("code").is_some_and(|c| c.is_i64()) || !error.get("message").is_some_and(Value::is_string)
                {
                    problems.push(format!("{path} needs an integer code and a text message"));
                }
            }
            if !errors.is_array() {
                problems.push(format!("{name}.errors must be a list"));
            }
        }
    }
    let mut references = Vec::new();
    collect_references(document, &mut references);
    for reference in references {
        let resolves = reference
            .strip_prefix('#')
            .and_then(|pointer| document.pointer(pointer))
            .is_some();
        if !resolves {
            problems.push(format!("$ref {reference} does not resolve"));
        }
    }
    if problems.is_empty() {
        Ok(())
    } else {
        Err(problems)
    }
}

fn fixed_fields(object: &Map<String, Value>, allowed: &[&str], path: &str, problems: &mut Vec<String>) {
    for key in object.keys() {
        if !allowed.contains(&key.as_str()) && !key.starts_with("x-") {
            problems.push(format!(
                "{path}: `{key}` is neither a field of the object nor an x- extension"
            ));
        }
    }
}

fn descriptor(value: &Value, path: &str, problems: &mut Vec<String>) {
    let Some(object) = value.as_object() else {
        problems.push(format!("{path} is not a content descriptor object"));
        return;
    };
    if object.contains_key("$ref") {
        return;
    }
    fixed_fields(object, &DESCRIPTOR_FIELDS, path, problems);
    if !object.get("name").is_some_and(Value::is_string) {
        problems.push(format!("{path}.name must be text"));
    }
    if !object.get("schema").is_some_and(|s| s.is_object() || s.is_boolean()) {
        problems.push(format!("{path}.schema must be a JSON Schema"));
    }
    if object.get("required").is_some_and(|r| !r.is_boolean()) {
        problems.push(format!("{path}.required must be true or false"));
    }
}

fn collect_references(value: &Value, references: &mut Vec<String>) {
    match value {
        Value::Object(map) => {
            for (key, sub) in map {
                match (key.as_str(), sub) {
                    ("$ref", Value::String(reference)) if reference.starts_with('#') => {
                        references.push(reference.clone())
                    }
                    _ => collect_references(sub, references),
                }
            }
        }
        Value::Array(items) => items.iter().for_each(|item| collect_references(item, references)),
        _ => {}
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn a_document_with_faults_is_refused_with_each_named() {
        let good = json!({
            "openrpc": "1.3.2",
            "info": {"title": "t", "version": "1"},
            "methods": [{"name": "a", "params": [{"name": "x", "required": true, "schema": {"$ref": "#/components/schemas/s"}}], "result": {"name": "r", "schema": true}}],
            "components": {"schemas": {"s": {"type": "string"}}},
        });
        assert_eq!(check_document(&good), Ok(()));
        let bad = json!({
            "openrpc": "2.0",
            "info": {"title": "t"},
            "methods": [
                {"name": "a", "params": [{"name": "x", "schema": {}}, {"name": "y", "required": true, "schema": {"$ref": "#/components/schemas/missing"}}], "result": {"name": "r", "schema": true}, "colour": 1},
                {"name": "a", "params": []},
            ],
        });
        let problems = check_document(&bad).unwrap_err().join("\n");
        for fragment in [
            "openrpc must be",
            "info.version",
            "`colour`",
            "required y follows",
            "listed twice",
            "has no result",
            "missing does not resolve",
        ] {
            assert!(problems.contains(fragment), "{fragment} not in {problems}");
        }
    }
}
