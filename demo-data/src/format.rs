//! Text output of the generator: numbers with a fixed number of significant digits, and a
//! small pretty-printing JSON writer.
//!
//! The committed demo files must be byte-identical wherever they are regenerated. Rust's
//! float formatting is exact and platform-independent, but the physics behind the numbers
//! calls the platform's `exp` and `ln`, which may differ in the last bit between C libraries.
//! Rounding every number to fewer digits than a double holds keeps such one-bit differences
//! out of the files.

use std::fmt::Write as _;

/// `value` rounded to `significant_digits` and written in the shortest form that reads
/// back to that rounded value: plain decimals between 1e-4 and 1e7, exponent form outside.
pub fn number(value: f64, significant_digits: usize) -> String {
    assert!(
        value.is_finite(),
        "non-finite value {value} cannot be written to the demo files"
    );
    let digits_after_point = significant_digits.saturating_sub(1);
    let rounded: f64 = format!("{value:.digits_after_point$e}")
        .parse()
        .expect("Rust's exponent format reads back");
    if rounded == 0.0 {
        return "0".to_owned();
    }
    let magnitude = rounded.abs();
    if (1e-4..1e7).contains(&magnitude) {
        format!("{rounded}")
    } else {
        format!("{rounded:e}")
    }
}

/// A JSON value, built in the order it is written.
pub enum Json {
    Number(f64),
    Integer(i64),
    Text(String),
    Array(Vec<Json>),
    Object(Vec<(String, Json)>),
}

/// Significant digits of every JSON number: more than the data need, fewer than a double.
const JSON_DIGITS: usize = 10;

impl Json {
    /// An object from (key, value) pairs.
    pub fn object<const N: usize>(entries: [(&str, Json); N]) -> Json {
        Json::Object(
            entries
                .into_iter()
                .map(|(key, value)| (key.to_owned(), value))
                .collect(),
        )
    }

    /// A text value.
    pub fn text(value: &str) -> Json {
        Json::Text(value.to_owned())
    }

    /// Pretty-printed with two-space indentation and a final newline.
    pub fn to_pretty_string(&self) -> String {
        let mut out = String::new();
        self.write(&mut out, 0);
        out.push('\n');
        out
    }

    fn write(&self, out: &mut String, indent: usize) {
        match self {
            Json::Number(value) => out.push_str(&number(*value, JSON_DIGITS)),
            Json::Integer(value) => {
                write!(out, "{value}").expect("writing to a String cannot fail");
            }
            Json::Text(value) => write_string(out, value),
            Json::Array(items) => {
                if items.is_empty() {
                    out.push_str("[]");
                    return;
                }
                out.push_str("[\n");
                for (index, item) in items.iter().enumerate() {
                    push_indent(out, indent + 1);
                    item.write(out, indent + 1);
                    out.push_str(if index + 1 < items.len() { ",\n" } else { "\n" });
                }
                push_indent(out, indent);
                out.push(']');
            }
            Json::Object(entries) => {
                if entries.is_empty() {
                    out.push_str("{}");
                    return;
                }
                out.push_str("{\n");
                for (index, (key, value)) in entries.iter().enumerate() {
                    push_indent(out, indent + 1);
                    write_string(out, key);
                    out.push_str(": ");
                    value.write(out, indent + 1);
                    out.push_str(if index + 1 < entries.len() { ",\n" } else { "\n" });
                }
                push_indent(out, indent);
                out.push('}');
            }
        }
    }
}

fn push_indent(out: &mut String, indent: usize) {
    for _ in 0..indent {
        out.push_str("  ");
    }
}

fn write_string(out: &mut String, value: &str) {
    out.push('"');
    for character in value.chars() {
        match character {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            '\t' => out.push_str("\\t"),
            control if (control as u32) < 0x20 => {
                write!(out, "\\u{:04x}", control as u32).expect("writing to a String cannot fail");
            }
            other => out.push(other),
        }
    }
    out.push('"');
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_rounded_and_short() {
        assert_eq!(number(3e21, 10), "3e21");
        assert_eq!(number(0.0005, 10), "0.0005");
        assert_eq!(number(20.0130000001, 10), "20.013");
        assert_eq!(number(-0.5, 7), "-0.5");
        assert_eq!(number(1.23456789e-9, 7), "1.234568e-9");
        assert_eq!(number(0.0, 7), "0");
        assert_eq!(number(123456789.0, 4), "1.235e8");
    }

    #[test]
    fn json_is_well_formed() {
        let value = Json::object([
            ("name", Json::text("a \"quoted\"\\ name")),
            ("values", Json::Array(vec![Json::Number(1.5), Json::Integer(-3)])),
            ("empty", Json::Array(vec![])),
        ]);
        assert_eq!(
            value.to_pretty_string(),
            "{\n  \"name\": \"a \\\"quoted\\\"\\\\ name\",\n  \"values\": [\n    1.5,\n    -3\n  ],\n  \"empty\": []\n}\n"
        );
    }
}
