//! The JSON text of a `dataset.rows` page, written straight from the columns.
//!
//! A page is `{"total_rows":T,"offset":O,"columns":{"name":[v, ...], ...}}`. Building it as
//! a `serde_json::Value` first costs one heap value per cell (90,000 of them for 10,000 rows
//! of 9 columns) and a second pass to write them; here serde_json's own serializer writes
//! each cell from the column as it is read, so the text is the same, byte for byte, as that
//! of the value (numbers by the same `ryu`/`itoa` code, strings by the same escaping), with
//! no intermediate values. The result is handed to the RPC layer as a [`RawValue`], which
//! it copies into the answer verbatim.
//!
//! Cells follow the value's rules: a null is `null`, a NaN or an infinity is `null` (JSON
//! has no such numbers), floats are written with the shortest text that reads back to the
//! same double, and types without a JSON counterpart (dates, for instance) as their text.

use polars::prelude::*;
use serde::ser::{Error as _, SerializeMap, SerializeSeq};
use serde::{Serialize, Serializer};
use serde_json::value::RawValue;
use serde_json::{json, Value};

/// One page of rows as the JSON text `dataset.rows` answers with.
pub fn rows_page(total_rows: usize, offset: usize, frame: &DataFrame) -> serde_json::Result<Box<RawValue>> {
    serde_json::value::to_raw_value(&Page {
        total_rows,
        offset,
        frame,
    })
}

struct Page<'a> {
    total_rows: usize,
    offset: usize,
    frame: &'a DataFrame,
}

impl Serialize for Page<'_> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        // The members in the order the value had them (serde_json keeps insertion order here).
        let mut page = serializer.serialize_map(Some(3))?;
        page.serialize_entry("total_rows", &self.total_rows)?;
        page.serialize_entry("offset", &self.offset)?;
        page.serialize_entry("columns", &Columns(self.frame))?;
        page.end()
    }
}

struct Columns<'a>(&'a DataFrame);

impl Serialize for Columns<'_> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let mut columns = serializer.serialize_map(Some(self.0.width()))?;
        for column in self.0.columns() {
            columns.serialize_entry(column.name().as_str(), &Cells(column.as_materialized_series()))?;
        }
        columns.end()
    }
}

struct Cells<'a>(&'a Series);

impl Serialize for Cells<'_> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let series = self.0;
        let mut cells = serializer.serialize_seq(Some(series.len()))?;
        // `Option<f64>` writes `null` for a null; serde_json's `serialize_f64` writes `null`
        // for a NaN or an infinity, as `Number::from_f64` made them null in the value.
        match series.dtype() {
            DataType::Float64 => {
                for cell in series.f64().map_err(S::Error::custom)?.iter() {
                    cells.serialize_element(&cell)?;
                }
            }
            DataType::Int64 => {
                for cell in series.i64().map_err(S::Error::custom)?.iter() {
                    cells.serialize_element(&cell)?;
                }
            }
            DataType::String => {
                for cell in series.str().map_err(S::Error::custom)?.iter() {
                    cells.serialize_element(&cell)?;
                }
            }
            DataType::Boolean => {
                for cell in series.bool().map_err(S::Error::custom)?.iter() {
                    cells.serialize_element(&cell)?;
                }
            }
            // The rarer types go through one dynamically typed cell each, as before.
            _ => {
                for cell in series.iter() {
                    cells.serialize_element(&cell_to_json(cell))?;
                }
            }
        }
        cells.end()
    }
}

/// A JSON value of one cell.
pub(crate) fn cell_to_json(value: AnyValue) -> Value {
    match value {
        AnyValue::Null => Value::Null,
        AnyValue::Boolean(b) => Value::Bool(b),
        AnyValue::String(s) => Value::String(s.to_owned()),
        AnyValue::StringOwned(s) => Value::String(s.to_string()),
        AnyValue::Float64(f) => serde_json::Number::from_f64(f)
            .map(Value::Number)
            .unwrap_or(Value::Null),
        AnyValue::Float32(f) => serde_json::Number::from_f64(f as f64)
            .map(Value::Number)
            .unwrap_or(Value::Null),
        AnyValue::Int64(i) => json!(i),
        AnyValue::Int32(i) => json!(i),
        AnyValue::Int16(i) => json!(i),
        AnyValue::Int8(i) => json!(i),
        AnyValue::UInt64(i) => json!(i),
        AnyValue::UInt32(i) => json!(i),
        AnyValue::UInt16(i) => json!(i),
        AnyValue::UInt8(i) => json!(i),
        other => Value::String(other.to_string()),
    }
}

/// The frame's columns as JSON arrays. `dataset.rows` writes the same text without building
/// the values (above in this file); its tests compare the two.
pub fn frame_to_json_columns(frame: &DataFrame) -> serde_json::Map<String, Value> {
    let mut columns = serde_json::Map::new();
    for column in frame.columns() {
        let series = column.as_materialized_series();
        // The common types read their values directly, without a dynamically typed cell
        // per value; the same JSON as `cell_to_json` gives (NaN and infinities as null).
        let values: Vec<Value> = match series.dtype() {
            DataType::Float64 => series
                .f64()
                .expect("a Float64 column")
                .iter()
                .map(|v| {
                    v.and_then(serde_json::Number::from_f64)
                        .map_or(Value::Null, Value::Number)
                })
                .collect(),
            DataType::Int64 => series
                .i64()
                .expect("an Int64 column")
                .iter()
                .map(|v| v.map_or(Value::Null, |i| Value::Number(i.into())))
                .collect(),
            DataType::String => series
                .str()
                .expect("a String column")
                .iter()
                .map(|v| v.map_or(Value::Null, |text| Value::String(text.to_owned())))
                .collect(),
            DataType::Boolean => series
                .bool()
                .expect("a Boolean column")
                .iter()
                .map(|v| v.map_or(Value::Null, Value::Bool))
                .collect(),
            _ => series.iter().map(cell_to_json).collect(),
        };
        columns.insert(column.name().to_string(), Value::Array(values));
    }
    columns
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    /// The text the value-building serializer gave for the same page.
    fn by_value(total_rows: usize, offset: usize, frame: &DataFrame) -> String {
        json!({ "total_rows": total_rows, "offset": offset, "columns": frame_to_json_columns(frame) }).to_string()
    }

    fn same_text(frame: &DataFrame) {
        let written = rows_page(12_345, 67, frame).unwrap();
        assert_eq!(written.get(), by_value(12_345, 67, frame));
    }

    #[test]
    fn a_page_is_written_as_the_value_was() {
        let floats = [
            Some(1.0),
            Some(-0.0),
            Some(0.1),
            Some(1e-300),
            Some(f64::MIN_POSITIVE),
            Some(5e-324),
            Some(1.7976931348623157e308),
            Some(123456789.125),
            Some(1e21),
            Some(1e22),
            Some(-2.5e-7),
            Some(f64::NAN),
            Some(f64::INFINITY),
            Some(f64::NEG_INFINITY),
            None,
            Some(3.0e15),
        ];
        let count = floats.len();
        let ints: Vec<Option<i64>> = (0..count as i64)
            .map(|i| match i {
                0 => Some(i64::MIN),
                1 => Some(i64::MAX),
                2 => None,
                _ => Some(i * -7919 + 3),
            })
            .collect();
        let texts: Vec<Option<&str>> = (0..count)
            .map(|i| match i % 6 {
                0 => Some("Hall bar A\"1\""),
                1 => None,
                2 => Some("back\\slash\ttab\nnewline\u{1}"),
                3 => Some("Ω·cm é 中 😀"),
                4 => Some(""),
                _ => Some("</script>"),
            })
            .collect();
        let flags: Vec<Option<bool>> = (0..count)
            .map(|i| match i % 3 {
                0 => Some(true),
                1 => Some(false),
                _ => None,
            })
            .collect();
        let small: Vec<Option<i32>> = (0..count as i32).map(|i| (i % 4 != 1).then_some(i - 5)).collect();
        let single: Vec<Option<f32>> = (0..count).map(|i| (i % 5 != 2).then_some(i as f32 * 0.1)).collect();
        let unsigned: Vec<u64> = (0..count as u64).map(|i| u64::MAX - i).collect();
        let frame = DataFrame::new_infer_height(vec![
            Column::new("float".into(), &floats),
            Column::new("int".into(), &ints),
            Column::new("sample \"name\"".into(), &texts),
            Column::new("flag".into(), &flags),
            Column::new("small".into(), &small),
            Column::new("single".into(), &single),
            Column::new("unsigned".into(), &unsigned),
        ])
        .unwrap();
        same_text(&frame);
        // A slice (offset into the chunks) and an empty page, as dataset.rows cuts them.
        same_text(&frame.slice(3, 7));
        same_text(&frame.slice(100, 10));
        same_text(&DataFrame::empty());
    }

    #[test]
    fn columns_of_several_chunks_are_written_whole() {
        let mut first = DataFrame::new_infer_height(vec![
            Column::new("x".into(), &[Some(1.5), None, Some(f64::NAN)]),
            Column::new("s".into(), &[Some("a"), Some("b"), None]),
        ])
        .unwrap();
        let second = DataFrame::new_infer_height(vec![
            Column::new("x".into(), &[Some(2.25), Some(-1e-9)]),
            Column::new("s".into(), &[None, Some("é")]),
        ])
        .unwrap();
        first.vstack_mut(&second).unwrap();
        same_text(&first);
        same_text(&first.slice(2, 2));
    }
}
