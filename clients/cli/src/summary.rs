//! An analysis run's summary as a person reads it: the fitted values with their standard
//! uncertainties in the customary units of the trade, the fit quality, what was assumed, and
//! the warnings; per group when the run was grouped. `mobilis run`, `mobilis pipeline` and
//! the demo print values the same way.

use mobilis_physics::quote::{self, Notation};
use mobilis_physics::units::format_number;
use serde_json::{Map, Value};
use std::fmt::Write;

/// `value ± uncertainty` as the command line prints it (`3.000e15 ± 0.038e15`,
/// `44.999 ± 0.094`); a missing or zero uncertainty leaves the value alone.
pub fn plus_minus(value: f64, uncertainty: f64) -> String {
    quote::with_uncertainty(value, Some(uncertainty), Notation::Plain)
}

/// `plus_minus` of two JSON numbers scaled by `factor` (into display units); `-` when the
/// value is missing.
pub fn plus_minus_json(value: &Value, uncertainty: &Value, factor: f64) -> String {
    match value.as_f64() {
        Some(v) => plus_minus(v * factor, uncertainty.as_f64().map_or(f64::NAN, |u| u * factor)),
        None => "-".into(),
    }
}

/// How one summary key is shown: the readable name, the factor from SI and the unit label.
struct Shown {
    name: String,
    factor: f64,
    unit: String,
}

/// Keys of the fit quality, printed on one line of their own.
const FIT_QUALITY: &[&str] = &[
    "chi_square",
    "degrees_of_freedom",
    "reduced_chi_square",
    "chi_square_p_value",
    "birge_ratio",
];

/// The readable name of a key and its customary unit (`mobilis_physics::quote`, as the report
/// pages quote it). `None` for a key that carries no unit.
fn shown(key: &str, value: f64) -> Option<Shown> {
    let unit = quote::summary_unit(key, value)?;
    Some(Shown {
        name: unit.quantity.replace('_', " "),
        factor: unit.factor,
        unit: unit.ascii,
    })
}

fn is_uncertainty(key: &str) -> bool {
    key.ends_with("_unc") || key.ends_with("_unc_stat") || key.ends_with("_unc_sys")
}

/// The value lines of one summary object: `name  value ± uncertainty unit`, strings and lists
/// of names as they are; numbers without a unit or an uncertainty (counts, settings) are left
/// to the stored summary.
/// With `results_only` (the items of a list: carriers, peaks), only values with an
/// uncertainty and texts.
fn value_lines(object: &Map<String, Value>, skip: &[&str], results_only: bool) -> Vec<(String, String)> {
    let mut lines = Vec::new();
    for (key, value) in object {
        if skip.contains(&key.as_str()) || FIT_QUALITY.contains(&key.as_str()) || is_uncertainty(key) {
            continue;
        }
        let uncertainty = object.get(&format!("{key}_unc"));
        match value {
            Value::Number(number) => {
                let number = number.as_f64().unwrap_or(f64::NAN);
                let unc = uncertainty.and_then(Value::as_f64).unwrap_or(f64::NAN);
                match shown(key, number) {
                    _ if results_only && uncertainty.is_none() => {}
                    Some(shown) => lines.push((
                        shown.name,
                        format!(
                            "{} {}",
                            plus_minus(number * shown.factor, unc * shown.factor),
                            shown.unit
                        ),
                    )),
                    None if uncertainty.is_some() => lines.push((key.replace('_', " "), plus_minus(number, unc))),
                    None => {}
                }
            }
            Value::String(text) if !key.ends_with("_source") && !text.is_empty() => {
                lines.push((key.replace('_', " "), text.clone()));
            }
            Value::Array(_) if results_only => {}
            Value::Array(items) if !items.is_empty() && items.iter().all(Value::is_string) => {
                let names: Vec<&str> = items.iter().filter_map(Value::as_str).collect();
                lines.push((key.replace('_', " "), names.join(", ")));
            }
            Value::Array(items) if !items.is_empty() && items.len() <= 16 && items.iter().all(Value::is_number) => {
                let first = items.first().and_then(Value::as_f64).unwrap_or(0.0);
                let (name, factor, unit) = shown(key, first).map_or((key.replace('_', " "), 1.0, String::new()), |s| {
                    (s.name, s.factor, s.unit)
                });
                let numbers: Vec<String> = items
                    .iter()
                    .filter_map(Value::as_f64)
                    .map(|v| format_number(v * factor))
                    .collect();
                lines.push((name, format!("{} {unit}", numbers.join(", ")).trim_end().to_owned()));
            }
            _ => {}
        }
    }
    lines
}

/// Whether an object holds a value with an uncertainty (a fitted result worth printing).
fn has_results(object: &Map<String, Value>) -> bool {
    object.keys().any(|key| key.ends_with("_unc"))
}

/// One line of fit quality, when the summary has one.
fn fit_quality(object: &Map<String, Value>) -> Option<String> {
    let reduced = object.get("reduced_chi_square").and_then(Value::as_f64)?;
    let mut line = format!("reduced chi-square {}", format_number(reduced));
    if let Some(dof) = object.get("degrees_of_freedom").and_then(Value::as_f64) {
        let _ = write!(line, " on {dof} degrees of freedom");
    }
    match object.get("chi_square_p_value").and_then(Value::as_f64) {
        Some(p) => {
            let _ = write!(line, ", p = {}", format_number(p));
        }
        None if object.get("weighted") == Some(&Value::Bool(false)) => line.push_str(", no p-value (unweighted fit)"),
        None => {}
    }
    if let Some(birge) = object.get("birge_ratio").and_then(Value::as_f64) {
        if birge > 1.0 {
            let _ = write!(
                line,
                "; uncertainties scaled by the Birge ratio {}",
                format_number(birge)
            );
        }
    }
    Some(line)
}

/// Writes one summary object at `indent`: its values, its lists of fitted items (carriers,
/// peaks), nested result objects, and the fit quality.
fn write_object(out: &mut String, object: &Map<String, Value>, skip: &[&str], indent: usize) {
    let pad = " ".repeat(indent);
    let lines = value_lines(object, skip, false);
    let width = lines.iter().map(|(name, _)| name.len()).max().unwrap_or(0).min(32);
    for (name, value) in &lines {
        let _ = writeln!(out, "{pad}{name:<width$}  {value}");
    }
    for (key, value) in object {
        match value {
            Value::Array(items) => {
                let objects: Vec<&Map<String, Value>> = items.iter().filter_map(Value::as_object).collect();
                if objects.is_empty() || !objects.iter().any(|o| has_results(o)) {
                    continue;
                }
                let _ = writeln!(out, "{pad}{}:", key.replace('_', " "));
                for (number, item) in objects.iter().enumerate() {
                    let parts: Vec<String> = value_lines(item, &[], true)
                        .into_iter()
                        .map(|(name, value)| {
                            if name == "carrier type" || name == "kind" {
                                value
                            } else {
                                format!("{name} {value}")
                            }
                        })
                        .collect();
                    let _ = writeln!(out, "{pad}  {}. {}", number + 1, parts.join(", "));
                }
            }
            Value::Object(inner) if has_results(inner) => {
                let _ = writeln!(out, "{pad}{}:", key.replace('_', " "));
                write_object(out, inner, &[], indent + 2);
            }
            _ => {}
        }
    }
    if let Some(line) = fit_quality(object) {
        let _ = writeln!(out, "{pad}fit: {line}");
    }
}

/// The text `mobilis run` prints for one `analysis.run` answer.
pub fn render_run(result: &Value) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} -> {} rows",
        result["output"].as_str().unwrap_or("?"),
        result["rows"]
    );
    if let Some(name) = result["summary_output"].as_str() {
        let _ = writeln!(out, "summary stored as {name} ({} rows)", result["summary_rows"]);
    }
    let summary = &result["summary"];
    match summary["groups"].as_array() {
        Some(groups) => {
            for group in groups {
                let key = group["group"].as_object().cloned().unwrap_or_default();
                let label: Vec<String> = key
                    .iter()
                    .map(|(column, value)| match value {
                        Value::String(text) => format!("{column}={text}"),
                        other => format!("{column}={other}"),
                    })
                    .collect();
                let _ = writeln!(out, "  [{}]", label.join(", "));
                let skip: Vec<&str> = key.keys().map(String::as_str).collect();
                if let Some(object) = group["summary"].as_object() {
                    write_object(&mut out, object, &skip, 4);
                }
                for warning in group["warnings"].as_array().into_iter().flatten() {
                    let _ = writeln!(out, "    warning: {}", warning.as_str().unwrap_or(""));
                }
            }
        }
        None => {
            if let Some(object) = summary.as_object() {
                write_object(&mut out, object, &[], 2);
            }
            for warning in result["warnings"].as_array().into_iter().flatten() {
                let _ = writeln!(out, "  warning: {}", warning.as_str().unwrap_or(""));
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn a_grouped_summary_prints_each_group_in_customary_units() {
        let result = json!({
            "output": "fit", "rows": 10,
            "summary": {"groups": [{
                "group": {"sample": "W1"},
                "summary": {
                    "sample": "W1", "carrier_type": "n",
                    "dopant_density_m3": 3.0e21, "dopant_density_m3_unc": 3.8e19,
                    "dopant_density_m3_unc_stat": 3.0e18,
                    "ionization_energy_eV": 0.045, "ionization_energy_eV_unc": 9.4e-5,
                    "quantum_lifetime_s": 3.04e-13, "quantum_lifetime_s_unc": 3.7e-16,
                    "reduced_chi_square": 1.2, "degrees_of_freedom": 44, "chi_square_p_value": 0.17,
                    "birge_ratio": 1.0, "starts": 15,
                    "calibrations_not_stated": ["field_calibration_rel"],
                    "carriers": [{"carrier_type": "p", "sheet_density_m2": 1.0e16, "sheet_density_m2_unc": 2.0e14,
                                  "mobility_m2_per_Vs": 0.5, "mobility_m2_per_Vs_unc": 0.01,
                                  "hall_mobility_m2_per_Vs": 0.49}]
                },
                "warnings": ["a warning of this group"]
            }]},
            "warnings": ["[sample=W1] a warning of this group"]
        });
        let text = render_run(&result);
        // Alignment aside: runs of spaces read as one.
        let text = text
            .lines()
            .map(|line| {
                let indent = line.len() - line.trim_start().len();
                format!(
                    "{}{}",
                    &line[..indent],
                    line.split_whitespace().collect::<Vec<_>>().join(" ")
                )
            })
            .collect::<Vec<_>>()
            .join("\n");
        for expected in [
            "fit -> 10 rows",
            "[sample=W1]",
            "dopant density 3.000e15 ± 0.038e15 cm^-3",
            "ionization energy 45.000 ± 0.094 meV",
            "quantum lifetime 0.30400 ± 0.00037 ps",
            "carrier type n",
            "calibrations not stated field_calibration_rel",
            "1. p, sheet density 1.000e12 ± 0.020e12 cm^-2, mobility 5000 ± 100 cm^2/(V s)",
            "fit: reduced chi-square 1.200 on 44 degrees of freedom, p = 0.1700",
            "    warning: a warning of this group",
        ] {
            assert!(text.contains(expected), "missing `{expected}` in\n{text}");
        }
        assert!(
            !text.contains("starts") && !text.contains("unc stat") && !text.contains("hall mobility"),
            "{text}"
        );
        assert_eq!(text.matches("a warning of this group").count(), 1, "{text}");
    }
}
