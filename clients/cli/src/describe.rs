//! `mobilis describe ANALYSIS`: an analysis's inputs and parameters as a person reads them,
//! from `analysis.describe` (the parameters' JSON Schema, the input roles' columns).

use mobilis_physics::units::unit_from_column_name;
use serde_json::{Map, Value};
use std::fmt::Write;

/// The unit a parameter or column is given in: the one its name carries
/// (`temperature_tolerance_K` -> K, `density_m3` -> m^-3, `band_gap_0K_eV` -> eV), else the
/// declared one.
fn unit_of(name: &str, declared: Option<&str>) -> String {
    for (suffix, unit) in [("_eV_per_K", "eV/K"), ("_per_eV", "eV^-1"), ("_eV", "eV")] {
        if name.ends_with(suffix) {
            return unit.into();
        }
    }
    unit_from_column_name(name)
        .map(|unit| unit.symbol().to_owned())
        .or_else(|| declared.filter(|u| !u.is_empty()).map(str::to_owned))
        .unwrap_or_default()
}

/// A JSON value as a person types it (`0.5`, `"Si"`, `[0.001, 1]`, `null`).
fn compact(value: &Value) -> String {
    match value {
        Value::String(text) => text.clone(),
        other => other.to_string(),
    }
}

/// A schema with its choices written out: derived parameter schemas state a choice as
/// `oneOf` constants (each with its description) and an optional one as `anyOf` with
/// `{"type": "null"}`; both read here as a `type` and an `enum`, plus the choices'
/// descriptions.
fn plain(schema: &Map<String, Value>) -> (Map<String, Value>, Vec<(String, String)>) {
    let mut plain = schema.clone();
    let mut meanings = Vec::new();
    if let Some(Value::Array(options)) = schema.get("anyOf") {
        let nullable = options.iter().any(|option| option["type"] == "null");
        let others: Vec<&Map<String, Value>> = options
            .iter()
            .filter(|option| option["type"] != "null")
            .filter_map(Value::as_object)
            .collect();
        if let [only] = others.as_slice() {
            let (inner, inner_meanings) = self::plain(only);
            for (key, value) in inner {
                if !matches!(key.as_str(), "description" | "default") {
                    plain.entry(key).or_insert(value);
                }
            }
            plain.remove("anyOf");
            meanings = inner_meanings;
            if nullable {
                let mut types: Vec<Value> = match plain.get("type") {
                    Some(Value::Array(list)) => list.clone(),
                    Some(one) => vec![one.clone()],
                    None => Vec::new(),
                };
                types.push(Value::from("null"));
                plain.insert("type".into(), Value::Array(types));
                if let Some(Value::Array(choices)) = plain.get_mut("enum") {
                    choices.push(Value::Null);
                }
            }
        }
    }
    if let Some(Value::Array(options)) = schema.get("oneOf") {
        if options.iter().all(|option| option.get("const").is_some()) {
            let mut types: Vec<Value> = Vec::new();
            for option in options {
                if let Some(kind) = option.get("type") {
                    if !types.contains(kind) {
                        types.push(kind.clone());
                    }
                }
                if let Some(meaning) = option.get("description").and_then(Value::as_str) {
                    meanings.push((compact(&option["const"]), meaning.to_owned()));
                }
            }
            let choices = options.iter().map(|option| option["const"].clone()).collect();
            plain.remove("oneOf");
            plain.insert("enum".into(), Value::Array(choices));
            if let [one] = types.as_slice() {
                plain.insert("type".into(), one.clone());
            }
        }
    }
    if let Some(items) = schema.get("items").and_then(Value::as_object) {
        let (items, item_meanings) = self::plain(items);
        plain.insert("items".into(), Value::Object(items));
        meanings.extend(item_meanings);
    }
    (plain, meanings)
}

/// The type a schema allows (`number`, `string or null`, `array of number`).
fn type_of(schema: &Map<String, Value>) -> String {
    let names: Vec<String> = match schema.get("type") {
        Some(Value::String(name)) => vec![name.clone()],
        Some(Value::Array(list)) => list.iter().filter_map(Value::as_str).map(str::to_owned).collect(),
        _ => Vec::new(),
    };
    let names: Vec<String> = names
        .into_iter()
        .map(
            |name| match (name.as_str(), schema.get("items").and_then(Value::as_object)) {
                ("array", Some(items)) => format!("array of {}", type_of(items)),
                _ => name,
            },
        )
        .collect();
    if names.is_empty() {
        "any".into()
    } else {
        names.join(" or ")
    }
}

/// The values a schema allows beyond its type: `one of Si, Ge`, `>= 0`, `2 items`.
fn allowed(schema: &Map<String, Value>) -> String {
    let mut parts = Vec::new();
    if let Some(Value::Array(options)) = schema.get("enum") {
        let options: Vec<String> = options.iter().map(compact).collect();
        parts.push(format!("one of {}", options.join(", ")));
    }
    if let Some(Value::Array(options)) = schema.get("items").and_then(|items| items.get("enum")) {
        let options: Vec<String> = options.iter().map(compact).collect();
        parts.push(format!("each one of {}", options.join(", ")));
    }
    for (key, symbol) in [
        ("minimum", ">="),
        ("exclusiveMinimum", ">"),
        ("maximum", "<="),
        ("exclusiveMaximum", "<"),
    ] {
        if let Some(bound) = schema.get(key) {
            parts.push(format!("{symbol} {}", compact(bound)));
        }
    }
    match (schema.get("minItems"), schema.get("maxItems")) {
        (Some(min), Some(max)) if min == max => parts.push(format!("{min} items")),
        (Some(min), Some(max)) => parts.push(format!("{min} to {max} items")),
        (Some(min), None) => parts.push(format!("at least {min} items")),
        (None, Some(max)) => parts.push(format!("at most {max} items")),
        (None, None) => {}
    }
    parts.join(", ")
}

/// Wraps `text` at `width` columns, each line after `indent`.
fn wrap(text: &str, indent: usize, width: usize) -> String {
    let pad = " ".repeat(indent);
    let mut out = String::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && indent + line.len() + 1 + word.len() > width {
            let _ = writeln!(out, "{pad}{line}");
            line.clear();
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        let _ = writeln!(out, "{pad}{line}");
    }
    out
}

/// One parameter (and the members of an object parameter, as `name.member`).
fn write_parameter(out: &mut String, name: &str, schema: &Map<String, Value>, required: bool) {
    let (schema, meanings) = plain(schema);
    let schema = &schema;
    let unit = unit_of(name, schema.get("unit").and_then(Value::as_str));
    let mut head = format!("  {name}  {}", type_of(schema));
    if !unit.is_empty() {
        let _ = write!(head, ", {unit}");
    }
    match schema.get("default") {
        Some(default) => {
            let _ = write!(head, "; default {}", compact(default));
        }
        None if required => head.push_str("; required"),
        None => head.push_str("; optional"),
    }
    let range = allowed(schema);
    if !range.is_empty() {
        let _ = write!(head, "; {range}");
    }
    let _ = writeln!(out, "{head}");
    if let Some(description) = schema.get("description").and_then(Value::as_str) {
        out.push_str(&wrap(description, 6, 96));
    }
    for (choice, meaning) in &meanings {
        out.push_str(&wrap(&format!("{choice}: {meaning}"), 8, 96));
    }
    if let Some(members) = schema.get("properties").and_then(Value::as_object) {
        for (member, member_schema) in members {
            if let Some(member_schema) = member_schema.as_object() {
                write_parameter(
                    out,
                    &format!("{name}.{member}"),
                    member_schema,
                    is_required(schema, member),
                );
            }
        }
    }
}

/// Whether an object schema lists `name` among its required members.
fn is_required(schema: &Map<String, Value>, name: &str) -> bool {
    schema
        .get("required")
        .and_then(Value::as_array)
        .is_some_and(|list| list.iter().any(|n| n == name))
}

/// The text of `mobilis describe` for one `analysis.describe` answer.
pub fn render(description: &Value) -> String {
    let mut out = String::new();
    let name = description["name"].as_str().unwrap_or("?");
    let _ = writeln!(
        out,
        "{name} (plugin {} {})",
        description["plugin"]["name"].as_str().unwrap_or("?"),
        description["plugin"]["version"].as_str().unwrap_or("?")
    );
    if let Some(summary) = description["summary"].as_str() {
        out.push_str(&wrap(summary, 2, 96));
    }
    if let Some(text) = description["description"].as_str() {
        out.push('\n');
        out.push_str(&wrap(text, 2, 96));
    }

    let _ = writeln!(out, "\nInputs (--input ROLE=DATASET):");
    for role in description["inputs"].as_array().into_iter().flatten() {
        let _ = writeln!(
            out,
            "  {} ({}): {}",
            role["role"].as_str().unwrap_or("?"),
            if role["required"].as_bool().unwrap_or(false) {
                "required"
            } else {
                "optional"
            },
            role["description"].as_str().unwrap_or("")
        );
        let columns: Vec<&Value> = role["columns"].as_array().into_iter().flatten().collect();
        let width = columns
            .iter()
            .filter_map(|c| c["name"].as_str())
            .map(str::len)
            .max()
            .unwrap_or(0);
        for column in columns {
            let column_name = column["name"].as_str().unwrap_or("?");
            let unit = unit_of(column_name, column["unit"].as_str());
            let mut kind = column["dtype"].as_str().unwrap_or("?").to_owned();
            if !unit.is_empty() {
                let _ = write!(kind, ", {unit}");
            }
            if !column["required"].as_bool().unwrap_or(true) {
                kind.push_str(", optional");
            }
            let _ = writeln!(
                out,
                "    {column_name:<width$}  {kind:<16}  {}",
                column["description"].as_str().unwrap_or("")
            );
        }
    }

    let _ = writeln!(out, "\nParameters (--params '{{\"NAME\": VALUE, ...}}', SI units):");
    let params = description["params"].as_object().cloned().unwrap_or_default();
    match params.get("properties").and_then(Value::as_object) {
        Some(properties) if !properties.is_empty() => {
            for (parameter, schema) in properties {
                if let Some(schema) = schema.as_object() {
                    write_parameter(&mut out, parameter, schema, is_required(&params, parameter));
                }
            }
        }
        _ => {
            let _ = writeln!(out, "  none");
        }
    }

    let keys: Vec<&str> = description["summary_keys"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|key| key["name"].as_str())
        .filter(|key| !key.ends_with("_unc") && !key.ends_with("_unc_stat") && !key.ends_with("_unc_sys"))
        .collect();
    if !keys.is_empty() {
        let _ = writeln!(
            out,
            "\nSummary (printed by `mobilis run`, stored with --summary-output):"
        );
        out.push_str(&wrap(&keys.join(", "), 2, 96));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn derived_choices_show_as_choices_with_their_meanings() {
        // The shapes a derived parameter schema gives a choice, an optional choice and a
        // list of choices (see `mobilis_sdk::sdk::params_schema`).
        let choice = |value: &str, meaning: &str| json!({"type": "string", "const": value, "description": meaning});
        let description = json!({
            "name": "x.fit", "plugin": {"name": "x", "version": "1.0"}, "inputs": [],
            "params": {"type": "object", "properties": {
                "window": {"oneOf": [choice("hann", "raised cosine"), choice("blackman", "lowest leakage")],
                           "default": "hann", "description": "FFT window"},
                "kind": {"anyOf": [{"oneOf": [choice("n", "electrons"), choice("p", "holes")]}, {"type": "null"}],
                         "default": null, "description": "force a kind"},
                "carriers": {"type": ["array", "null"], "minItems": 1,
                             "items": {"oneOf": [choice("n", "electrons"), choice("p", "holes")]}}
            }},
            "summary_keys": []
        });
        let text = render(&description);
        for expected in [
            "window  string; default hann; one of hann, blackman",
            "hann: raised cosine",
            "kind  string or null; default null; one of n, p, null",
            "p: holes",
            "carriers  array of string or null; optional; each one of n, p, at least 1 items",
        ] {
            assert!(text.contains(expected), "missing `{expected}` in\n{text}");
        }
        assert!(!text.contains(" any"), "{text}");
    }

    #[test]
    fn parameters_show_unit_default_range_and_meaning() {
        let description = json!({
            "name": "x.fit", "plugin": {"name": "x", "version": "1.0"},
            "summary": "fits things",
            "inputs": [{"role": "hall", "required": true, "description": "the table",
                        "columns": [{"name": "temperature_K", "dtype": "f64", "unit": "K", "required": true, "description": "temperature"},
                                    {"name": "density_m3", "dtype": "f64", "unit": "m^-3", "required": true, "description": "density"}]}],
            "params": {"type": "object", "properties": {
                "temperature_tolerance_K": {"type": "number", "minimum": 0, "default": 0.5, "description": "how close"},
                "material": {"type": "string", "enum": ["Si", "Ge"], "default": "Si", "description": "preset"},
                "bounds_eV": {"type": "array", "items": {"type": "number"}, "minItems": 2, "maxItems": 2, "description": "range"},
                "overrides": {"type": "object", "description": "replace", "properties": {
                    "band_gap_0K_eV": {"type": "number", "exclusiveMinimum": 0, "description": "gap"},
                    "varshni_alpha_eV_per_K": {"type": "number", "minimum": 0, "description": "alpha"}}}
            }},
            "summary_keys": [{"name": "energy_eV"}, {"name": "energy_eV_unc"}]
        });
        let text = render(&description);
        for expected in [
            "x.fit (plugin x 1.0)",
            "Inputs (--input ROLE=DATASET):",
            "hall (required): the table",
            "temperature_K  f64, K",
            "temperature_tolerance_K  number, K; default 0.5; >= 0",
            "      how close",
            "material  string; default Si; one of Si, Ge",
            "bounds_eV  array of number, eV; optional; 2 items",
            "overrides.band_gap_0K_eV  number, eV; optional; > 0",
            "f64, m^-3",
            "varshni_alpha_eV_per_K  number, eV/K; optional",
            "Summary (printed by `mobilis run`, stored with --summary-output):\n  energy_eV\n",
        ] {
            assert!(text.contains(expected), "missing `{expected}` in\n{text}");
        }
    }
}
