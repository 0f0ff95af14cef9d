//! Validation of analysis parameters against the JSON Schema a plugin declares.
//!
//! The host checks parameters before it calls a plugin, so that a plugin never sees a
//! malformed request and the client gets a message naming the parameter. Only the subset
//! of JSON Schema that parameter objects need is supported, and a plugin whose schema
//! uses any other keyword is refused at load time ([`check_supported`]): a validator that
//! silently ignored a keyword would let bad parameters through.
//!
//! Supported: `type` (a name or a list), `properties`, `required`, `additionalProperties`
//! (boolean or a schema), `enum`, `const`, `minimum`, `maximum`, `exclusiveMinimum`,
//! `exclusiveMaximum`, `minLength`, `maxLength`, `items`, `minItems`, `maxItems`, `anyOf`,
//! `oneOf`; annotations `title`, `description`, `default`, `examples`, `$schema`,
//! `$comment`, `format`, `deprecated`, `readOnly`, `writeOnly` are accepted and ignored
//! (`format` as JSON Schema 2020-12 makes it, an annotation: derived schemas write
//! `"format": "uint"` beside `"minimum": 0`, which does the checking).
//! Schemas derived by the SDK from typed parameters stay within this subset (subschemas
//! inline, every enum a list of constants).

use serde_json::{Map, Value};

const VALIDATING: [&str; 17] = [
    "type",
    "properties",
    "required",
    "additionalProperties",
    "enum",
    "const",
    "minimum",
    "maximum",
    "exclusiveMinimum",
    "exclusiveMaximum",
    "minLength",
    "maxLength",
    "items",
    "minItems",
    "maxItems",
    "anyOf",
    "oneOf",
];
/// Keywords that describe and never constrain; `format` is among them because schemars
/// writes it for every number (`double`, `uint32`, ...) and JSON Schema 2020-12 makes it an
/// annotation unless a validator opts in.
const ANNOTATIONS: [&str; 10] = [
    "title",
    "description",
    "default",
    "examples",
    "$schema",
    "$comment",
    "format",
    "deprecated",
    "readOnly",
    "writeOnly",
];

/// Refuses a schema that uses keywords this validator does not implement.
pub fn check_supported(schema: &Value, path: &str) -> Result<(), String> {
    let Value::Object(map) = schema else {
        return match schema {
            Value::Bool(_) => Ok(()),
            _ => Err(format!("{path}: a schema must be an object or a boolean")),
        };
    };
    for (key, value) in map {
        if ANNOTATIONS.contains(&key.as_str()) {
            continue;
        }
        if !VALIDATING.contains(&key.as_str()) {
            return Err(format!("{path}: unsupported JSON Schema keyword `{key}`"));
        }
        match key.as_str() {
            "properties" => {
                let Value::Object(properties) = value else {
                    return Err(format!("{path}: `properties` must be an object"));
                };
                for (name, sub) in properties {
                    check_supported(sub, &format!("{path}.{name}"))?;
                }
            }
            "items" | "additionalProperties" => check_supported(value, &format!("{path}.{key}"))?,
            "anyOf" | "oneOf" => {
                let Value::Array(options) = value else {
                    return Err(format!("{path}: `{key}` must be an array"));
                };
                for (index, sub) in options.iter().enumerate() {
                    check_supported(sub, &format!("{path}.{key}[{index}]"))?;
                }
            }
            _ => {}
        }
    }
    Ok(())
}

/// Checks `value` against `schema`; the error names the offending parameter.
pub fn validate(schema: &Value, value: &Value) -> Result<(), String> {
    validate_at(schema, value, "params")
}

fn type_name(value: &Value) -> &'static str {
    match value {
        Value::Null => "null",
        Value::Bool(_) => "boolean",
        Value::Number(n) if n.is_i64() || n.is_u64() => "integer",
        Value::Number(_) => "number",
        Value::String(_) => "string",
        Value::Array(_) => "array",
        Value::Object(_) => "object",
    }
}

fn matches_type(expected: &str, value: &Value) -> bool {
    match expected {
        "number" => value.is_number(),
        "integer" => match value {
            Value::Number(n) => n.is_i64() || n.is_u64() || n.as_f64().is_some_and(|f| f.fract() == 0.0),
            _ => false,
        },
        other => type_name(value) == other,
    }
}

fn validate_at(schema: &Value, value: &Value, path: &str) -> Result<(), String> {
    let map: &Map<String, Value> = match schema {
        Value::Bool(true) => return Ok(()),
        Value::Bool(false) => return Err(format!("{path} is not allowed")),
        Value::Object(map) => map,
        _ => return Ok(()),
    };
    if let Some(expected) = map.get("type") {
        let names: Vec<&str> = match expected {
            Value::String(name) => vec![name.as_str()],
            Value::Array(list) => list.iter().filter_map(Value::as_str).collect(),
            _ => Vec::new(),
        };
        if !names.is_empty() && !names.iter().any(|name| matches_type(name, value)) {
            return Err(format!(
                "{path} must be {} (got {})",
                names.join(" or "),
                type_name(value)
            ));
        }
    }
    if let Some(Value::Array(allowed)) = map.get("enum") {
        if !allowed.contains(value) {
            let listed: Vec<String> = allowed.iter().map(Value::to_string).collect();
            return Err(format!("{path} must be one of {} (got {value})", listed.join(", ")));
        }
    }
    if let Some(constant) = map.get("const") {
        if constant != value {
            return Err(format!("{path} must be {constant} (got {value})"));
        }
    }
    if let Some(number) = value.as_f64() {
        let bound = |key: &str| map.get(key).and_then(Value::as_f64);
        if let Some(min) = bound("minimum") {
            if number < min {
                return Err(format!("{path} must be at least {min} (got {number})"));
            }
        }
        if let Some(max) = bound("maximum") {
            if number > max {
                return Err(format!("{path} must be at most {max} (got {number})"));
            }
        }
        if let Some(min) = bound("exclusiveMinimum") {
            if number <= min {
                return Err(format!("{path} must be greater than {min} (got {number})"));
            }
        }
        if let Some(max) = bound("exclusiveMaximum") {
            if number >= max {
                return Err(format!("{path} must be less than {max} (got {number})"));
            }
        }
    }
    if let Value::String(text) = value {
        let length = text.chars().count() as u64;
        if let Some(min) = map.get("minLength").and_then(Value::as_u64) {
            if length < min {
                return Err(format!("{path} must have at least {min} characters"));
            }
        }
        if let Some(max) = map.get("maxLength").and_then(Value::as_u64) {
            if length > max {
                return Err(format!("{path} must have at most {max} characters"));
            }
        }
    }
    if let Value::Array(items) = value {
        if let Some(min) = map.get("minItems").and_then(Value::as_u64) {
            if (items.len() as u64) < min {
                return Err(format!("{path} must have at least {min} items"));
            }
        }
        if let Some(max) = map.get("maxItems").and_then(Value::as_u64) {
            if (items.len() as u64) > max {
                return Err(format!("{path} must have at most {max} items"));
            }
        }
        if let Some(item_schema) = map.get("items") {
            for (index, item) in items.iter().enumerate() {
                validate_at(item_schema, item, &format!("{path}[{index}]"))?;
            }
        }
    }
    if let Value::Object(object) = value {
        if let Some(Value::Array(required)) = map.get("required") {
            for name in required.iter().filter_map(Value::as_str) {
                if !object.contains_key(name) {
                    return Err(format!("{path}.{name} is required"));
                }
            }
        }
        let properties = map.get("properties").and_then(Value::as_object);
        for (name, item) in object {
            let item_path = format!("{path}.{name}");
            match properties.and_then(|p| p.get(name)) {
                Some(item_schema) => validate_at(item_schema, item, &item_path)?,
                None => match map.get("additionalProperties") {
                    Some(Value::Bool(false)) => {
                        let known: Vec<&str> = properties
                            .map(|p| p.keys().map(String::as_str).collect())
                            .unwrap_or_default();
                        return Err(format!(
                            "{item_path} is not a known parameter; known: {}",
                            known.join(", ")
                        ));
                    }
                    Some(extra) => validate_at(extra, item, &item_path)?,
                    None => {}
                },
            }
        }
    }
    for key in ["anyOf", "oneOf"] {
        // A derived enum is a list of constants (with their descriptions), perhaps with
        // null: name the choices rather than "matches none of the forms".
        if let Some(allowed) = map
            .get(key)
            .and_then(Value::as_array)
            .and_then(|options| choices(options))
        {
            if !allowed.contains(value) {
                let listed: Vec<String> = allowed.iter().map(Value::to_string).collect();
                return Err(format!("{path} must be one of {} (got {value})", listed.join(", ")));
            }
        }
    }
    if let Some(Value::Array(options)) = map.get("anyOf") {
        if !options.iter().any(|option| validate_at(option, value, path).is_ok()) {
            let first = options
                .iter()
                .find_map(|option| validate_at(option, value, path).err())
                .unwrap_or_default();
            return Err(format!("{path} matches none of the allowed forms ({first})"));
        }
    }
    if let Some(Value::Array(options)) = map.get("oneOf") {
        let matching = options
            .iter()
            .filter(|option| validate_at(option, value, path).is_ok())
            .count();
        if matching != 1 {
            return Err(format!(
                "{path} must match exactly one of the allowed forms (matches {matching})"
            ));
        }
    }
    Ok(())
}

/// The values a list of alternatives allows, when every alternative is a constant, an
/// enum, a list of such alternatives or `{"type": "null"}`; `None` otherwise.
fn choices(options: &[Value]) -> Option<Vec<Value>> {
    let mut allowed = Vec::new();
    for option in options {
        let map = option.as_object()?;
        if let Some(constant) = map.get("const") {
            allowed.push(constant.clone());
        } else if let Some(Value::Array(values)) = map.get("enum") {
            allowed.extend(values.iter().cloned());
        } else if let Some(Value::Array(nested)) = map.get("oneOf").or_else(|| map.get("anyOf")) {
            allowed.extend(choices(nested)?);
        } else if map.get("type") == Some(&Value::String("null".into())) {
            allowed.push(Value::Null);
        } else {
            return None;
        }
    }
    Some(allowed)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn schema() -> Value {
        json!({
            "type": "object",
            "additionalProperties": false,
            "required": ["material"],
            "properties": {
                "material": {"type": "string", "enum": ["Si", "Ge"]},
                "tolerance_K": {"type": "number", "exclusiveMinimum": 0, "default": 0.5},
                "count": {"type": "integer", "minimum": 1, "maximum": 10},
                "force": {"type": ["string", "null"]},
                "columns": {"type": "array", "items": {"type": "string"}, "minItems": 1}
            }
        })
    }

    fn check(params: Value, expected_error: Option<&str>) {
        let result = validate(&schema(), &params);
        match expected_error {
            None => assert!(result.is_ok(), "{params}: {result:?}"),
            Some(fragment) => {
                let message = result.expect_err(&params.to_string());
                assert!(message.contains(fragment), "{params}: `{message}` lacks `{fragment}`");
            }
        }
    }

    #[test]
    fn parameters_are_checked_with_messages_that_name_them() {
        check(json!({"material": "Si"}), None);
        check(
            json!({"material": "Si", "tolerance_K": 0.1, "count": 3, "force": null, "columns": ["a"]}),
            None,
        );
        check(json!({"material": "Si", "count": 3.0}), None);
        check(json!({}), Some("params.material is required"));
        check(json!({"material": "GaAs"}), Some("params.material must be one of"));
        check(
            json!({"material": "Si", "tolerance_K": 0}),
            Some("params.tolerance_K must be greater than 0"),
        );
        check(
            json!({"material": "Si", "tolerance_K": "big"}),
            Some("params.tolerance_K must be number"),
        );
        check(json!({"material": "Si", "count": 11}), Some("at most 10"));
        check(json!({"material": "Si", "count": 1.5}), Some("must be integer"));
        check(
            json!({"material": "Si", "colour": 1}),
            Some("params.colour is not a known parameter"),
        );
        check(json!({"material": "Si", "columns": []}), Some("at least 1 items"));
        check(
            json!({"material": "Si", "columns": [3]}),
            Some("params.columns[0] must be string"),
        );
        check(json!([1]), Some("params must be object"));
    }

    #[test]
    fn derived_enums_name_their_choices() {
        // The shape schemars gives a documented enum, optional: constants with descriptions.
        let schema = json!({
            "type": "object",
            "additionalProperties": false,
            "properties": {
                "criterion": {"anyOf": [
                    {"oneOf": [
                        {"type": "string", "const": "bic", "description": "Bayesian"},
                        {"type": "string", "const": "aicc", "description": "corrected Akaike"}
                    ]},
                    {"type": "null"}
                ]},
                "seed": {"type": "integer", "format": "uint64", "minimum": 0}
            }
        });
        assert!(check_supported(&schema, "spectrum.fit").is_ok());
        assert!(validate(&schema, &json!({"criterion": "aicc", "seed": 3})).is_ok());
        assert!(validate(&schema, &json!({"criterion": null})).is_ok());
        let message = validate(&schema, &json!({"criterion": "aic"})).unwrap_err();
        assert_eq!(
            message,
            r#"params.criterion must be one of "bic", "aicc", null (got "aic")"#
        );
    }

    #[test]
    fn unsupported_keywords_are_refused() {
        assert!(check_supported(&schema(), "hall.reduce").is_ok());
        let bad = json!({"type": "object", "properties": {"x": {"type": "string", "pattern": "^a"}}});
        let message = check_supported(&bad, "hall.reduce").unwrap_err();
        assert!(
            message.contains("hall.reduce.x") && message.contains("pattern"),
            "{message}"
        );
    }
}
