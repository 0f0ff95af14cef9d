//! Plain-text tables of dataset pages, in the customary units of the trade.

use mobilis_physics::units::customary_display;
pub use mobilis_physics::units::format_number;
use serde_json::Value;

/// Renders `{column: [values]}` as aligned text; numbers converted to customary units
/// when `customary` is true.
pub fn render(columns: &Value, only: &[String], customary: bool) -> String {
    let Some(map) = columns.as_object() else {
        return String::new();
    };
    let mut headers = Vec::new();
    let mut cells: Vec<Vec<String>> = Vec::new();
    for (name, values) in map {
        if !only.is_empty() && !only.contains(name) {
            continue;
        }
        let display = if customary { customary_display(name) } else { None };
        headers.push(
            display
                .as_ref()
                .map(|d| d.label.clone())
                .unwrap_or_else(|| name.clone()),
        );
        // Displayed = SI * factor + offset (the offset shifts ln n from m^-3 to cm^-3).
        let (factor, offset) = display.as_ref().map_or((1.0, 0.0), |d| (d.factor, d.offset));
        cells.push(
            values
                .as_array()
                .into_iter()
                .flatten()
                .map(|v| match v {
                    Value::Null => "-".to_owned(),
                    Value::Number(n) => match n.as_i64() {
                        Some(i) if display.is_none() => i.to_string(),
                        _ => format_number(n.as_f64().unwrap_or(f64::NAN) * factor + offset),
                    },
                    Value::String(s) if s.is_empty() => "-".to_owned(),
                    Value::String(s) => s.clone(),
                    other => other.to_string(),
                })
                .collect(),
        );
    }
    let rows = cells.first().map(Vec::len).unwrap_or(0);
    let widths: Vec<usize> = headers
        .iter()
        .zip(&cells)
        .map(|(h, c)| c.iter().map(String::len).chain([h.len()]).max().unwrap_or(0))
        .collect();
    let mut out = String::new();
    let line = |fields: Vec<&str>| -> String {
        let parts: Vec<String> = fields.iter().zip(&widths).map(|(f, w)| format!("{f:>w$}")).collect();
        parts.join("  ").trim_end().to_owned() + "\n"
    };
    out += &line(headers.iter().map(String::as_str).collect());
    for row in 0..rows {
        out += &line(cells.iter().map(|c| c[row].as_str()).collect());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn numbers_keep_four_significant_digits() {
        assert_eq!(format_number(1234.5678), "1235");
        assert_eq!(format_number(0.012345), "0.01235");
        assert_eq!(format_number(3.0e15), "3.000e15");
        assert_eq!(format_number(-2.5), "-2.500");
    }

    #[test]
    fn densities_are_shown_per_cubic_centimetre() {
        let page = json!({"density_m3": [3.0e21], "sample": ["a"]});
        let text = render(&page, &[], true);
        assert!(text.contains("density_cm3") && text.contains("3.000e15"), "{text}");
    }
}
