//! Reading and writing tables: CSV, Parquet and Arrow IPC files, inline JSON columns, and
//! conversion of lab units into the SI columns of the table convention.

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use mobilis_core::units;
use polars::prelude::*;
use serde::Deserialize;
use std::collections::BTreeMap;
use std::fs::File;
use std::path::Path;

/// File formats of imports and exports.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FileFormat {
    Csv,
    Parquet,
    ArrowIpc,
}

impl FileFormat {
    pub fn parse(name: &str) -> ServiceResult<Self> {
        match name.to_ascii_lowercase().as_str() {
            "csv" => Ok(FileFormat::Csv),
            "parquet" => Ok(FileFormat::Parquet),
            "ipc" | "arrow" | "feather" => Ok(FileFormat::ArrowIpc),
            other => Err(ServiceError::invalid_params(format!("unknown format `{other}`"))
                .with_help("use csv, parquet or ipc (Arrow IPC file)")),
        }
    }

    /// The format a file name suggests.
    pub fn from_extension(path: &Path) -> ServiceResult<Self> {
        match path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .as_deref()
        {
            Some("csv") => Ok(FileFormat::Csv),
            Some("parquet") | Some("pq") => Ok(FileFormat::Parquet),
            Some("arrow") | Some("ipc") | Some("feather") => Ok(FileFormat::ArrowIpc),
            _ => Err(
                ServiceError::invalid_params(format!("cannot tell the format of {}", path.display()))
                    .with_help("pass format: csv, parquet or ipc, or use a .csv, .parquet or .arrow file name"),
            ),
        }
    }

    pub fn name(self) -> &'static str {
        match self {
            FileFormat::Csv => "csv",
            FileFormat::Parquet => "parquet",
            FileFormat::ArrowIpc => "ipc",
        }
    }
}

fn file_error(path: &Path, error: impl std::fmt::Display) -> ServiceError {
    ServiceError::new(
        ErrorKind::FileProblem,
        format!("cannot read {}: {error}", path.display()),
    )
}

/// Reads a whole file into a DataFrame.
pub fn read_file(path: &Path, format: FileFormat) -> ServiceResult<DataFrame> {
    let frame = match format {
        FileFormat::Csv => CsvReadOptions::default()
            .with_has_header(true)
            .with_infer_schema_length(Some(10_000))
            .try_into_reader_with_file_path(Some(path.to_owned()))
            .and_then(|reader| reader.finish()),
        FileFormat::Parquet => {
            let file = File::open(path).map_err(|e| file_error(path, e))?;
            ParquetReader::new(file).finish()
        }
        FileFormat::ArrowIpc => {
            let file = File::open(path).map_err(|e| file_error(path, e))?;
            IpcReader::new(file).finish()
        }
    }
    .map_err(|e| file_error(path, e).with_help(format!("check that the file is valid {}", format.name())))?;
    if frame.width() == 0 {
        return Err(file_error(path, "the file has no columns"));
    }
    Ok(frame)
}

/// Writes a DataFrame to a file (the caller has checked the path).
pub fn write_file(frame: &DataFrame, path: &Path, format: FileFormat) -> ServiceResult<()> {
    let write_error = |e: &dyn std::fmt::Display| {
        ServiceError::new(ErrorKind::FileProblem, format!("cannot write {}: {e}", path.display()))
    };
    let mut file = File::create(path).map_err(|e| write_error(&e))?;
    let mut frame = frame.clone();
    let result = match format {
        FileFormat::Csv => CsvWriter::new(&mut file).include_header(true).finish(&mut frame),
        FileFormat::Parquet => ParquetWriter::new(&mut file).finish(&mut frame).map(|_| ()),
        FileFormat::ArrowIpc => IpcWriter::new(&mut file).finish(&mut frame),
    };
    result.map_err(|e| write_error(&e))?;
    file.sync_all().map_err(|e| write_error(&e))
}

/// Builds a DataFrame from inline JSON columns `{name: [values]}`. Each column holds
/// numbers, strings or booleans (nulls allowed); integers stay integers unless a float
/// appears in the column.
pub fn frame_from_json_columns(columns: &serde_json::Map<String, serde_json::Value>) -> ServiceResult<DataFrame> {
    if columns.is_empty() {
        return Err(ServiceError::invalid_params("columns is empty")
            .with_help("send at least one column: {\"name\": [values]}"));
    }
    let mut built = Vec::with_capacity(columns.len());
    let mut height = None;
    for (name, values) in columns {
        let values = values
            .as_array()
            .ok_or_else(|| ServiceError::invalid_params(format!("column `{name}` must be an array of values")))?;
        if let Some(expected) = height {
            if values.len() != expected {
                return Err(ServiceError::invalid_params(format!(
                    "column `{name}` has {} values, the others {expected}; all columns need the same length",
                    values.len()
                )));
            }
        }
        height = Some(values.len());
        built.push(json_values_to_column(name, values)?);
    }
    DataFrame::new(height.unwrap_or(0), built).map_err(|e| ServiceError::invalid_params(e.to_string()))
}

fn json_values_to_column(name: &str, values: &[serde_json::Value]) -> ServiceResult<Column> {
    use serde_json::Value;
    let present = || values.iter().filter(|v| !v.is_null());
    let mixed = || {
        ServiceError::invalid_params(format!("column `{name}` mixes value types"))
            .with_help("a column holds only numbers, only strings or only booleans (and nulls)")
    };
    let name = PlSmallStr::from_str(name);
    if present().all(Value::is_string) {
        let data: Vec<Option<&str>> = values.iter().map(Value::as_str).collect();
        return Ok(Column::new(name, data));
    }
    if present().all(Value::is_boolean) {
        let data: Vec<Option<bool>> = values.iter().map(Value::as_bool).collect();
        return Ok(Column::new(name, data));
    }
    if !present().all(Value::is_number) {
        return Err(mixed());
    }
    if present().all(|v| v.is_i64()) {
        let data: Vec<Option<i64>> = values.iter().map(Value::as_i64).collect();
        return Ok(Column::new(name, data));
    }
    let data: Vec<Option<f64>> = values.iter().map(Value::as_f64).collect();
    Ok(Column::new(name, data))
}

/// A unit given for one column: a unit name, or a unit with an explicit new column name.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(untagged)]
pub enum UnitSpec {
    Unit(String),
    Renamed { unit: String, to: String },
}

impl UnitSpec {
    pub fn unit(&self) -> &str {
        match self {
            UnitSpec::Unit(unit) | UnitSpec::Renamed { unit, .. } => unit,
        }
    }
}

/// Converts the named columns into SI and renames them by the table convention
/// (`temperature_C` in degC becomes `temperature_K`), or to the explicit `to` name.
pub fn apply_units(frame: DataFrame, units_by_column: &BTreeMap<String, UnitSpec>) -> ServiceResult<DataFrame> {
    let mut frame = frame;
    for (column_name, spec) in units_by_column {
        let unit = units::parse_unit(spec.unit())
            .map_err(|error| ServiceError::invalid_params(format!("units.{column_name}: {error}")))?;
        let column = frame.column(column_name).map_err(|_| {
            let present: Vec<String> = frame.get_column_names().iter().map(|n| n.to_string()).collect();
            ServiceError::new(
                ErrorKind::ColumnProblem,
                format!("units names column `{column_name}`, which the table lacks"),
            )
            .with_help(format!("the table's columns are: {}", present.join(", ")))
        })?;
        if !column.dtype().is_primitive_numeric() {
            return Err(ServiceError::new(
                ErrorKind::ColumnProblem,
                format!(
                    "column `{column_name}` holds {}, not numbers; only numeric columns take units",
                    column.dtype()
                ),
            ));
        }
        let mut values: Vec<Option<f64>> = column
            .cast(&DataType::Float64)
            .map_err(|e| ServiceError::new(ErrorKind::ColumnProblem, e.to_string()))?
            .f64()
            .expect("cast to Float64")
            .iter()
            .collect();
        for value in values.iter_mut().flatten() {
            *value = units::to_si(*value, &unit);
        }
        if let UnitSpec::Unit(_) = spec {
            units::check_column_unit(column_name, &unit)
                .map_err(|error| ServiceError::invalid_params(format!("units.{column_name}: {error}")))?;
        }
        let new_name = match spec {
            UnitSpec::Unit(_) => units::si_column_name(column_name, &unit),
            UnitSpec::Renamed { to, .. } => to.clone(),
        };
        if new_name != *column_name && frame.column(&new_name).is_ok() {
            return Err(ServiceError::new(
                ErrorKind::ColumnProblem,
                format!("converting `{column_name}` would create `{new_name}`, which the table already has"),
            )
            .with_help(
                "drop one of the two columns, or give an explicit target: {\"unit\": ..., \"to\": \"new_name\"}",
            ));
        }
        let converted = Column::new(PlSmallStr::from_str(&new_name), values);
        let index = frame.get_column_index(column_name).expect("column exists");
        frame
            .replace_column(index, converted)
            .map_err(|e| ServiceError::new(ErrorKind::ColumnProblem, e.to_string()))?;
    }
    Ok(frame)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn inline_columns_keep_their_types_and_lengths_are_checked() {
        let columns = json!({"sample": ["a", "b"], "i_in": [1, 2], "temperature_K": [4.2, 300], "ok": [true, null]});
        let frame = frame_from_json_columns(columns.as_object().unwrap()).unwrap();
        assert_eq!(frame.column("i_in").unwrap().dtype(), &DataType::Int64);
        assert_eq!(frame.column("temperature_K").unwrap().dtype(), &DataType::Float64);
        assert_eq!(frame.column("sample").unwrap().dtype(), &DataType::String);
        let bad = json!({"a": [1, 2], "b": [1]});
        assert!(frame_from_json_columns(bad.as_object().unwrap())
            .unwrap_err()
            .message
            .contains("same length"));
        let mixed = json!({"a": [1, "x"]});
        assert!(frame_from_json_columns(mixed.as_object().unwrap())
            .unwrap_err()
            .message
            .contains("mixes"));
    }

    #[test]
    fn units_convert_and_rename() {
        let frame = df!("temperature_C" => [0.0, 100.0], "field_kG" => [5i64, -5], "sample" => ["a", "b"]).unwrap();
        let mut spec = BTreeMap::new();
        spec.insert("temperature_C".to_owned(), UnitSpec::Unit("degC".into()));
        spec.insert(
            "field_kG".to_owned(),
            UnitSpec::Renamed {
                unit: "kG".into(),
                to: "field_T".into(),
            },
        );
        let converted = apply_units(frame, &spec).unwrap();
        let temperature: Vec<f64> = converted
            .column("temperature_K")
            .unwrap()
            .f64()
            .unwrap()
            .into_no_null_iter()
            .collect();
        // Ice and boiling points of water at one atmosphere (common practice).
        assert_eq!(temperature, vec![273.15, 373.15]);
        let field: Vec<f64> = converted
            .column("field_T")
            .unwrap()
            .f64()
            .unwrap()
            .into_no_null_iter()
            .collect();
        // 1 G = 1e-4 T by the definition of the gauss.
        assert_eq!(field, vec![0.5, -0.5]);
        let mut wrong = BTreeMap::new();
        wrong.insert("sample".to_owned(), UnitSpec::Unit("K".into()));
        assert!(apply_units(converted, &wrong).is_err());
    }
}
