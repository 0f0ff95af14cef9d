//! Reading and writing tables: CSV, Parquet and Arrow IPC files, inline JSON columns, and
//! conversion of lab units into the SI columns of the table convention.
//!
//! # What `dataset.import` does with a lab's file
//!
//! In this order (`Service::dataset_import` drives it; the `call_id` progress stages are
//! `reading the file`, `parsing`, `converting units` and `storing`, and a cancel is honoured
//! between them):
//!
//! 1. **Read.** The file is read whole once ([`load_source`]); its SHA-256 (computed on a
//!    second thread while the bytes are parsed, [`load_opened_while`]), size and modification
//!    time (UTC, RFC 3339) go into the dataset's provenance with the path, format, rename,
//!    units and the CSV options that differ from the default. Manifests written before these
//!    members existed still load.
//! 2. **Scan** (CSV only): the dialect options and the structural checks of
//!    [`csv_dialect`]; the rows reach polars only after the scan has accepted them.
//! 3. **Rename** (`rename: {"source": "new"}`, [`apply_rename`]): any column, text ones
//!    included; inline `columns` take it too. A source column that is missing, or two columns
//!    ending with one name, are errors that list the columns.
//! 4. **Units** (`units: {column: unit}`, [`apply_units`]), naming columns by their name
//!    after rename. The values are converted into SI and the column renamed by the
//!    `quantity_unit` convention of `mobilis_physics::units` (`temperature_C` in `degC` becomes
//!    `temperature_K`, `field_kG` in `kG` becomes `field_T`, a name without a unit suffix gets
//!    one appended); `{column: {"unit": "...", "to": "new_name"}}` chooses the new name
//!    instead ([`UnitSpec`]). A text column given a unit is accepted when every cell reads as
//!    a number (a file that quotes its numbers); otherwise the first cell that does not is
//!    named, with `csv.decimal_comma` as the fix when it looks like `1,5`.
//! 5. **Notes**: what the import read but an analysis may refuse; nothing is changed, and the
//!    answer's `notes` says what to do (the CLI prints them). Cells are placed by their line
//!    in the file, counted from 1 as above.
//!    - [`decimal_comma_notes`]: text columns of a CSV file read without `decimal_comma`
//!      whose every cell looks like a number with a decimal comma (`25,5`), with one cell's
//!      place and the options to use. The `contacts` column is left out: its pair notation
//!      `21,34` looks the same.
//!    - [`unparsed_number_notes`]: text columns of a CSV file with more number cells than
//!      others, which a few cells (`n/a`, `--`, `1.2e-3V`) made text: how many cells are not
//!      numbers, the first three with their lines, and what to do: marks of a missing value
//!      (`NA`, `N/A`, `n/a`, `NaN`, `--`, ...) are read as missing with the
//!      `csv.null_values` the note spells out (or left empty in the file: an empty cell is a
//!      missing value); other cells are to be corrected in the file.
//!    - [`not_a_number_notes`]: float columns of a CSV file holding `NaN` or infinities,
//!      which the parser reads as such floats (not as missing values unless
//!      `csv.null_values` names them).
//!    - [`empty_column_notes`]: columns of a CSV file or of inline columns with no value in
//!      any row, which are stored as Float64 columns of nulls (an inline column of nulls
//!      too), so that a sheet's empty `thickness_m` reads as 2D samples.
//!
//! Errors about a file name it and point at the place, `line L` or `line L, column C` (lines
//! counted from 1 in the file as written, skipped and comment lines included; columns are field
//! positions from 1), and the help line names the option that would fix it in both spellings,
//! JSON-RPC and CLI: `csv.separator ";" in dataset.import (mobilis import --separator ';')`.

use crate::csv_dialect::{self, CsvDialect, SourceMap};
use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use mobilis_physics::units;
use polars::prelude::*;
use std::collections::BTreeMap;
use std::fs::File;
use std::io::Cursor;
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

/// A source file as read for an import: its bytes and what identifies them.
pub struct SourceFile {
    pub bytes: Vec<u8>,
    /// SHA-256 of the bytes, lower-case hex.
    pub sha256: String,
    pub size_bytes: u64,
    /// Last modification, UTC, RFC 3339 (absent where the file system does not keep it).
    pub modified: Option<String>,
}

/// Reads a file whole, once, so that the table and its checksum describe the same bytes.
pub fn load_source(path: &Path) -> ServiceResult<SourceFile> {
    let file = File::open(path).map_err(|e| file_error(path, e))?;
    load_opened(path, file)
}

/// [`load_source`] of a file already opened (and checked) by the caller; `path` names it
/// in messages.
pub fn load_opened(path: &Path, file: File) -> ServiceResult<SourceFile> {
    Ok(load_opened_while(path, file, |_| ())?.0)
}

/// [`load_opened`] that runs `work` on the file's bytes on this thread while their SHA-256
/// is computed on another: on a large file the hash costs about as much as decoding
/// Parquet, and neither needs the other.
pub fn load_opened_while<R>(
    path: &Path,
    mut file: File,
    work: impl FnOnce(&[u8]) -> R,
) -> ServiceResult<(SourceFile, R)> {
    use sha2::{Digest, Sha256};
    use std::io::Read;
    let mut bytes = Vec::new();
    file.read_to_end(&mut bytes).map_err(|e| file_error(path, e))?;
    let modified = file
        .metadata()
        .and_then(|m| m.modified())
        .ok()
        .map(crate::store::utc_timestamp);
    let (digest, worked) = std::thread::scope(|scope| {
        let hashing = std::thread::Builder::new()
            .name("mobilis-sha256".into())
            .spawn_scoped(scope, || Sha256::digest(&bytes));
        let worked = work(&bytes);
        let digest = match hashing {
            Ok(handle) => handle.join().unwrap_or_else(|panic| std::panic::resume_unwind(panic)),
            Err(_) => Sha256::digest(&bytes),
        };
        (digest, worked)
    });
    let sha256 = digest.iter().map(|b| format!("{b:02x}")).collect();
    Ok((
        SourceFile {
            size_bytes: bytes.len() as u64,
            bytes,
            sha256,
            modified,
        },
        worked,
    ))
}

/// Reads a file's bytes into a DataFrame; CSV in the given dialect, with the line of
/// every row (see [`csv_dialect::read_csv`] for `keeps_commas`).
pub fn read_bytes(
    path: &Path,
    bytes: &[u8],
    format: FileFormat,
    dialect: &CsvDialect,
    keeps_commas: impl Fn(&str) -> bool,
) -> ServiceResult<(DataFrame, Option<SourceMap>)> {
    let (frame, map) = match format {
        FileFormat::Csv => {
            let (frame, map) = csv_dialect::read_csv(bytes, dialect, keeps_commas).map_err(|e| ServiceError {
                message: format!("{}: {}", path.display(), e.message),
                ..e
            })?;
            (frame, Some(map))
        }
        FileFormat::Parquet => (
            ParquetReader::new(Cursor::new(bytes))
                .finish()
                .map_err(|e| file_error(path, e).with_help("check that the file is valid parquet"))?,
            None,
        ),
        FileFormat::ArrowIpc => (
            IpcReader::new(Cursor::new(bytes))
                .finish()
                .map_err(|e| file_error(path, e).with_help("check that the file is valid Arrow IPC"))?,
            None,
        ),
    };
    if frame.width() == 0 {
        return Err(file_error(path, "the file has no columns"));
    }
    Ok((frame, map))
}

/// Renames columns (`{"source name": "new_name"}`), any column, before units apply.
pub fn apply_rename(frame: DataFrame, rename: &BTreeMap<String, String>) -> ServiceResult<DataFrame> {
    if rename.is_empty() {
        return Ok(frame);
    }
    let present: Vec<String> = frame.get_column_names().iter().map(|n| n.to_string()).collect();
    let mut names = present.clone();
    for (source, target) in rename {
        let Some(position) = present.iter().position(|n| n == source) else {
            return Err(ServiceError::new(
                ErrorKind::ColumnProblem,
                format!("rename names column `{source}`, which the table lacks"),
            )
            .with_help(format!("the table's columns are: {}", quoted_list(&present))));
        };
        if target.trim().is_empty() {
            return Err(ServiceError::invalid_params(format!(
                "rename gives column `{source}` an empty name"
            )));
        }
        names[position] = target.clone();
    }
    for (position, name) in names.iter().enumerate() {
        if let Some(other) = names[..position].iter().position(|n| n == name) {
            return Err(ServiceError::new(
                ErrorKind::ColumnProblem,
                format!(
                    "after rename two columns would be named `{name}` (`{}` and `{}`)",
                    present[other], present[position]
                ),
            )
            .with_help("rename one of them to another name, or rename the existing column away"));
        }
    }
    let mut frame = frame;
    frame
        .set_column_names(&names)
        .map_err(|e| ServiceError::new(ErrorKind::ColumnProblem, e.to_string()))?;
    Ok(frame)
}

fn quoted_list(names: &[String]) -> String {
    names.iter().map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ")
}

/// Writes a DataFrame to a file (the caller has checked the path).
pub fn write_file(frame: &DataFrame, path: &Path, format: FileFormat) -> ServiceResult<()> {
    let write_error = |e: &dyn std::fmt::Display| {
        ServiceError::new(ErrorKind::FileProblem, format!("cannot write {}: {e}", path.display()))
    };
    let mut file = File::create(path).map_err(|e| write_error(&e))?;
    write_into(frame, &mut file, format).map_err(|e| write_error(&e))?;
    file.sync_all().map_err(|e| write_error(&e))
}

/// Writes a DataFrame into an open file in `format` (the caller syncs and names it).
pub fn write_into(frame: &DataFrame, file: &mut File, format: FileFormat) -> PolarsResult<()> {
    let mut frame = frame.clone();
    match format {
        FileFormat::Csv => CsvWriter::new(file).include_header(true).finish(&mut frame),
        FileFormat::Parquet => ParquetWriter::new(file).finish(&mut frame).map(|_| ()),
        FileFormat::ArrowIpc => IpcWriter::new(file).finish(&mut frame),
    }
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
    if !values.is_empty() && present().next().is_none() {
        // No value in any row: missing numbers, as an empty column of a CSV file reads.
        return Ok(Column::full_null(name, values.len(), &DataType::Float64));
    }
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

/// A unit given for one column: a member of `dataset.import`'s params, defined by the protocol.
pub use mobilis_protocol::params::UnitSpec;

/// Converts the named columns into SI and renames them by the table convention
/// (`temperature_C` in degC becomes `temperature_K`), or to the explicit `to` name.
/// `source` locates a cell in the file it came from, for errors; without it cells are
/// named by row.
pub fn apply_units(
    frame: DataFrame,
    units_by_column: &BTreeMap<String, UnitSpec>,
    source: Option<&SourceMap>,
) -> ServiceResult<DataFrame> {
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
            .with_help(format!(
                "the table's columns are (after rename): {}; units names columns by their name after rename",
                quoted_list(&present)
            ))
        })?;
        let position = frame.get_column_index(column_name).expect("column exists");
        let numbers = if column.dtype().is_primitive_numeric() || column.dtype().is_null() {
            column.cast(&DataType::Float64)
        } else if column.dtype().is_string() {
            check_text_numbers(column, column_name, position, source)?;
            column.cast(&DataType::Float64)
        } else {
            return Err(ServiceError::new(
                ErrorKind::ColumnProblem,
                format!(
                    "column `{column_name}` holds {}, not numbers; only numeric columns take units",
                    column.dtype()
                ),
            ));
        };
        let mut values: Vec<Option<f64>> = numbers
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
        frame
            .replace_column(position, converted)
            .map_err(|e| ServiceError::new(ErrorKind::ColumnProblem, e.to_string()))?;
    }
    Ok(frame)
}

/// Notes on text columns of a CSV file that look like numbers written with a decimal
/// comma (every cell, `25,5`), read without `decimal_comma`: the import stands, but an
/// analysis will find text where it expects numbers. The `contacts` column is left alone
/// (its pair notation `21,34` looks the same).
pub fn decimal_comma_notes(frame: &DataFrame, source: &SourceMap) -> Vec<String> {
    let mut columns = Vec::new();
    let mut example = None;
    for (position, column) in frame.columns().iter().enumerate() {
        if column.name().as_str() == "contacts" || !column.dtype().is_string() {
            continue;
        }
        let texts = column.str().expect("a string column");
        let mut first = None;
        let mut all = true;
        for (row, text) in texts.iter().enumerate() {
            let Some(text) = text else { continue };
            if csv_dialect::is_decimal_comma_number(text) {
                first.get_or_insert((row, text.to_owned()));
            } else {
                all = false;
                break;
            }
        }
        if let (true, Some((row, text))) = (all, first) {
            columns.push(format!("`{}`", column.name()));
            example.get_or_insert(format!("`{text}` at {}", source.locate(row, position)));
        }
    }
    let Some(example) = example else {
        return Vec::new();
    };
    let subject = if columns.len() == 1 {
        format!("column {} holds", columns[0])
    } else {
        format!("columns {} hold", columns.join(", "))
    };
    vec![format!(
        "{subject} text such as {example}: numbers with a decimal comma? Import again with csv.decimal_comma true and a separator other than `,` (mobilis import --decimal-comma --separator ';')"
    )]
}

/// How many of a column's cells that are not numbers a note names, with their lines.
const CELLS_NAMED: usize = 3;

/// Texts labs commonly write for a value that is missing (common practice of spreadsheet
/// and instrument exports), compared without regard to case.
const MISSING_VALUE_MARKERS: [&str; 10] = ["na", "n/a", "#n/a", "nan", "null", "none", "-", "--", "---", "?"];

/// Notes on text columns of a CSV file that are mostly numbers: a few cells that are not
/// (`n/a`, `--`, `1.2e-3V`) made the whole column text, which an analysis will refuse. Each
/// note names the column, how many cells are not numbers, the first few with their lines
/// in the file, and what to do. Nothing is changed: the column stays text until the file
/// says otherwise. "Mostly" is more number cells than others; a text column with a few
/// numbers in it (sample names such as `7`) is left alone. The `contacts` column is left
/// out (its pair notation `21,34` is text), and so are columns that
/// [`decimal_comma_notes`] names.
pub fn unparsed_number_notes(frame: &DataFrame, source: &SourceMap) -> Vec<String> {
    let mut notes = Vec::new();
    for column in frame.columns() {
        if column.name().as_str() == "contacts" || !column.dtype().is_string() {
            continue;
        }
        let texts = column.str().expect("a string column");
        if !mostly_numbers(texts) {
            continue;
        }
        let (mut numbers, mut unparsed, mut markers) = (0usize, 0usize, 0usize);
        let mut decimal_commas = 0usize;
        let mut named = Vec::new();
        let mut marker_texts: Vec<&str> = Vec::new();
        for (row, text) in texts.iter().enumerate() {
            let Some(text) = text else { continue };
            let text = text.trim();
            if text.parse::<f64>().is_ok_and(f64::is_finite) {
                numbers += 1;
                continue;
            }
            unparsed += 1;
            if MISSING_VALUE_MARKERS.contains(&text.to_lowercase().as_str()) {
                markers += 1;
                if !marker_texts.contains(&text) {
                    marker_texts.push(text);
                }
            }
            decimal_commas += usize::from(!source.decimal_comma && csv_dialect::is_decimal_comma_number(text));
            if named.len() < CELLS_NAMED {
                named.push(format!("`{text}` on {}", line_of(source, row)));
            }
        }
        if unparsed == 0 || numbers <= unparsed || decimal_commas == unparsed {
            continue;
        }
        let cells = numbers + unparsed;
        let more = if unparsed > named.len() { ", ..." } else { "" };
        let mut advice = Vec::new();
        if markers > 0 {
            advice.push(format!(
                "{} mark{} missing values: read {} as missing with {}, or leave those cells empty in the file (an empty cell is a missing value)",
                quoted_texts(&marker_texts),
                if marker_texts.len() == 1 { "s" } else { "" },
                if marker_texts.len() == 1 { "it" } else { "them" },
                null_values_option(&marker_texts)
            ));
        }
        if markers < unparsed {
            advice.push(format!(
                "correct the {}cells that are not numbers in the file{}",
                if markers > 0 { "other " } else { "" },
                if decimal_commas > 0 {
                    " (cells with a decimal comma, 1,5, need csv.decimal_comma true and a separator other than `,`: mobilis import --decimal-comma --separator ';')"
                } else {
                    ""
                }
            ));
        }
        let advice = advice.join("; ");
        notes.push(format!(
            "column `{}` was imported as text: {unparsed} of its {cells} non-empty cells {} ({}{more}; lines of the file, counted from 1); an analysis that needs numbers will refuse the column: {advice}",
            column.name(),
            if unparsed == 1 { "is not a number" } else { "are not numbers" },
            named.join(", "),
        ));
    }
    notes
}

/// Whether more cells of a text column read as finite numbers than not. Counts only, and
/// stops as soon as the rest cannot change the answer, so that a column of names (most
/// text columns) costs at most half a pass before [`unparsed_number_notes`] moves on.
fn mostly_numbers(texts: &StringChunked) -> bool {
    let mut remaining = texts.len() - texts.null_count();
    let (mut numbers, mut others) = (0usize, 0usize);
    for text in texts.iter().flatten() {
        remaining -= 1;
        if text.trim().parse::<f64>().is_ok_and(f64::is_finite) {
            numbers += 1;
        } else {
            others += 1;
        }
        if numbers + remaining <= others {
            return false;
        }
        if numbers > others + remaining {
            return true;
        }
    }
    numbers > others
}

/// Notes on float columns of a CSV file that hold `NaN` or infinities: the parser reads
/// `NaN`, `inf` and `-inf` as such floats, which a lab may have written for a missing value.
/// The values stay as read; the note names the column, how many, and the first few lines.
pub fn not_a_number_notes(frame: &DataFrame, source: &SourceMap) -> Vec<String> {
    let mut notes = Vec::new();
    for column in frame.columns() {
        let Ok(values) = column.f64() else { continue };
        let mut count = 0usize;
        let mut named = Vec::new();
        for (row, value) in values.iter().enumerate() {
            let Some(value) = value.filter(|value| !value.is_finite()) else {
                continue;
            };
            count += 1;
            if named.len() < CELLS_NAMED {
                let shown = if value.is_nan() {
                    "NaN"
                } else if value > 0.0 {
                    "inf"
                } else {
                    "-inf"
                };
                named.push(format!("`{shown}` on {}", line_of(source, row)));
            }
        }
        if count == 0 {
            continue;
        }
        let more = if count > named.len() { ", ..." } else { "" };
        notes.push(format!(
            "column `{}` holds {count} value{} that {} not finite numbers ({}{more}): analyses refuse or skip them; where the file means a missing value, leave the cell empty, or read `NaN` as missing with {}",
            column.name(),
            if count == 1 { "" } else { "s" },
            if count == 1 { "is" } else { "are" },
            named.join(", "),
            null_values_option(&["NaN"])
        ));
    }
    notes
}

/// `` `n/a`, `--` ``: texts as a note quotes them.
fn quoted_texts(texts: &[&str]) -> String {
    texts
        .iter()
        .map(|text| format!("`{text}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The `csv.null_values` option that reads `texts` as missing values, in both spellings.
fn null_values_option(texts: &[&str]) -> String {
    let json = serde_json::to_string(texts).expect("texts serialize");
    let flags: Vec<String> = texts.iter().map(|text| format!("--null-value '{text}'")).collect();
    format!(
        "csv.null_values {json} in dataset.import (mobilis import {})",
        flags.join(" ")
    )
}

/// "line 7": where a row of the frame is in the file.
fn line_of(source: &SourceMap, row: usize) -> String {
    source
        .lines
        .get(row)
        .map_or_else(|| format!("data row {}", row + 1), |line| format!("line {line}"))
}

/// Notes on columns that have no value in any row, which an import stores as Float64
/// columns of nulls ([`csv_dialect::empty_columns_as_numbers`]): a sheet's `thickness_m`
/// left empty for 2D samples reads as missing numbers, not as text.
pub fn empty_column_notes(frame: &DataFrame) -> Vec<String> {
    let rows = frame.height();
    let empty: Vec<String> = frame
        .columns()
        .iter()
        .filter(|column| rows > 0 && column.null_count() == rows && column.dtype() == &DataType::Float64)
        .map(|column| format!("`{}`", column.name()))
        .collect();
    match empty.len() {
        0 => Vec::new(),
        1 => vec![format!(
            "column {} has no value in any row: it was imported as numbers (Float64), every value missing",
            empty[0]
        )],
        _ => vec![format!(
            "columns {} have no value in any row: they were imported as numbers (Float64), every value missing",
            empty.join(", ")
        )],
    }
}

/// A text column given a unit: fine when every cell reads as a number (a file that quotes
/// its numbers); otherwise an error naming the first cell that does not, and the option
/// that would read it when it is a number with a decimal comma.
fn check_text_numbers(
    column: &Column,
    column_name: &str,
    position: usize,
    source: Option<&SourceMap>,
) -> ServiceResult<()> {
    let texts = column.str().expect("a string column");
    for (row, text) in texts.iter().enumerate() {
        let Some(text) = text else { continue };
        if text.trim().is_empty() || text.trim().parse::<f64>().is_ok() {
            continue;
        }
        let place = match source {
            Some(map) => map.locate(row, position),
            None => format!("row {}", row + 1),
        };
        let error = ServiceError::new(
            ErrorKind::ColumnProblem,
            format!("{place} (`{column_name}`): `{text}` is not a number, and units gives this column a unit"),
        );
        let comma = csv_dialect::is_decimal_comma_number(text);
        return Err(match (comma, source) {
            (true, Some(map)) if !map.decimal_comma => error.with_help(
                "the file writes decimal commas: csv.decimal_comma true and a separator other than `,` in dataset.import (mobilis import --decimal-comma --separator ';')",
            ),
            (true, None) => error.with_help("send numbers with a decimal point, as JSON numbers"),
            (false, Some(_)) if MISSING_VALUE_MARKERS.contains(&text.trim().to_lowercase().as_str()) => {
                error.with_help(format!(
                    "`{}` marks a missing value? Read it as one with {}, or leave the cell empty",
                    text.trim(),
                    null_values_option(&[text.trim()])
                ))
            }
            _ => error.with_help(format!(
                "correct the cell, leave it empty for a missing value, or leave `{column_name}` out of units"
            )),
        });
    }
    Ok(())
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
        let converted = apply_units(frame, &spec, None).unwrap();
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
        assert!(apply_units(converted, &wrong, None).is_err());
    }

    #[test]
    fn rename_comes_first_and_takes_text_columns() {
        let frame = df!("Sample ID" => ["a", "b"], "T (C)" => [0.0, 100.0]).unwrap();
        let rename = BTreeMap::from([
            ("Sample ID".to_owned(), "sample".to_owned()),
            ("T (C)".to_owned(), "temperature_C".to_owned()),
        ]);
        let renamed = apply_rename(frame.clone(), &rename).unwrap();
        let names: Vec<String> = renamed.get_column_names().iter().map(|n| n.to_string()).collect();
        assert_eq!(names, vec!["sample", "temperature_C"]);
        let units = BTreeMap::from([("temperature_C".to_owned(), UnitSpec::Unit("degC".into()))]);
        assert!(apply_units(renamed, &units, None)
            .unwrap()
            .column("temperature_K")
            .is_ok());
        let missing = BTreeMap::from([("Sample".to_owned(), "sample".to_owned())]);
        let error = apply_rename(frame.clone(), &missing).unwrap_err();
        assert!(error.message.contains("`Sample`"), "{}", error.message);
        assert!(error.help.unwrap().contains("`Sample ID`"));
        let clash = BTreeMap::from([("Sample ID".to_owned(), "T (C)".to_owned())]);
        assert!(apply_rename(frame, &clash).unwrap_err().message.contains("two columns"));
    }

    #[test]
    fn text_in_a_column_given_a_unit_is_located_in_the_file() {
        let dialect = CsvDialect {
            separator: ";".into(),
            ..CsvDialect::default()
        };
        let text = "# export\nsample;T\na;25\nb;n/a\n";
        let dialect = CsvDialect {
            comment_prefix: Some("#".into()),
            ..dialect
        };
        let (frame, map) = csv_dialect::read_csv(text.as_bytes(), &dialect, |_| false).unwrap();
        let units = BTreeMap::from([("T".to_owned(), UnitSpec::Unit("degC".into()))]);
        let error = apply_units(frame, &units, Some(&map)).unwrap_err();
        assert_eq!(
            error.message,
            "line 4, column 2 (`T`): `n/a` is not a number, and units gives this column a unit"
        );
        assert!(error
            .help
            .unwrap()
            .contains("csv.null_values [\"n/a\"] in dataset.import (mobilis import --null-value 'n/a')"));
        let (frame, map) = csv_dialect::read_csv("sample;T\na;25,5\n".as_bytes(), &dialect, |_| false).unwrap();
        let error = apply_units(frame, &units, Some(&map)).unwrap_err();
        assert!(error.message.starts_with("line 2, column 2"), "{}", error.message);
        assert!(error.help.unwrap().contains("--decimal-comma"));
        // Quoted numbers are numbers.
        let (frame, map) = csv_dialect::read_csv("sample;T\na;\"25\"\n".as_bytes(), &dialect, |_| false).unwrap();
        assert!(apply_units(frame, &units, Some(&map)).is_ok());
    }

    #[test]
    fn a_mostly_numeric_column_with_junk_is_noted_with_its_lines() {
        let text = "sample,voltage_V\na,1.5e-3\nb,n/a\nc,2.0e-3\nd,--\ne,1.2e-3V\nf,2.5e-3\ng,NA\nh,3e-3\ni,4e-3\n";
        let (frame, map) = csv_dialect::read_csv(text.as_bytes(), &CsvDialect::default(), |_| false).unwrap();
        // Nothing is changed: the column stays text.
        assert_eq!(frame.column("voltage_V").unwrap().dtype(), &DataType::String);
        let notes = unparsed_number_notes(&frame, &map);
        assert_eq!(notes.len(), 1, "{notes:?}");
        let note = &notes[0];
        for words in [
            "column `voltage_V` was imported as text: 4 of its 9 non-empty cells are not numbers",
            "`n/a` on line 3, `--` on line 5, `1.2e-3V` on line 6, ...",
            "`n/a`, `--`, `NA` mark missing values: read them as missing with csv.null_values [\"n/a\",\"--\",\"NA\"] in dataset.import (mobilis import --null-value 'n/a' --null-value '--' --null-value 'NA')",
            "correct the other cells that are not numbers in the file",
        ] {
            assert!(note.contains(words), "{words}: {note}");
        }
        // Following the note: the markers are missing values, the cell with a unit is left.
        let dialect = CsvDialect {
            null_values: vec!["n/a".into(), "--".into(), "NA".into()],
            ..CsvDialect::default()
        };
        let (frame, map) = csv_dialect::read_csv(text.as_bytes(), &dialect, |_| false).unwrap();
        assert_eq!(frame.column("voltage_V").unwrap().null_count(), 3);
        let notes = unparsed_number_notes(&frame, &map);
        assert!(
            notes[0].contains("1 of its 6 non-empty cells is not a number (`1.2e-3V` on line 6;"),
            "{notes:?}"
        );
        assert!(!notes[0].contains("null_values"), "{notes:?}");
        // Only marks of missing values: the advice is the option alone.
        let text = "sample,T\na,1\nb,N/A\nc,2\n";
        let (frame, map) = csv_dialect::read_csv(text.as_bytes(), &CsvDialect::default(), |_| false).unwrap();
        let notes = unparsed_number_notes(&frame, &map);
        assert!(
            notes[0].contains("`N/A` marks missing values: read it as missing with csv.null_values [\"N/A\"]")
                && !notes[0].contains("correct"),
            "{notes:?}"
        );
        // A text column with a few numbers, and numbers with decimal commas, are left alone.
        let text = "sample;T\nW1;1,5\n7;2,5\nW3;3,5\n";
        let semicolons = CsvDialect {
            separator: ";".into(),
            ..CsvDialect::default()
        };
        let (frame, map) = csv_dialect::read_csv(text.as_bytes(), &semicolons, |_| false).unwrap();
        assert!(unparsed_number_notes(&frame, &map).is_empty(), "{frame}");
        // `NaN` and `nan` read as text or as floats that are not numbers, as the parser
        // decides; either way a note names the cell's line.
        for text in [
            "sample,T\na,1\nb,NaN\nc,2\nd,3\n",
            "sample,T\na,1\nb,nan\nc,2\nd,3\n",
            "sample,T\na,1.5\nb,NaN\nc,2.5\nd,3.5\n",
        ] {
            let (frame, map) = csv_dialect::read_csv(text.as_bytes(), &CsvDialect::default(), |_| false).unwrap();
            let notes = [unparsed_number_notes(&frame, &map), not_a_number_notes(&frame, &map)].concat();
            assert!(
                notes.len() == 1 && notes[0].contains("`T`") && notes[0].to_lowercase().contains("`nan` on line 3"),
                "{text}: {notes:?}"
            );
        }
        let text = "sample,T\na,1.5\nb,NaN\nc,2.5\nd,\ne,inf\n";
        let (frame, map) = csv_dialect::read_csv(text.as_bytes(), &CsvDialect::default(), |_| false).unwrap();
        assert_eq!(frame.column("T").unwrap().dtype(), &DataType::Float64);
        let notes = not_a_number_notes(&frame, &map);
        assert_eq!(
            notes,
            vec!["column `T` holds 2 values that are not finite numbers (`NaN` on line 3, `inf` on line 6): analyses refuse or skip them; where the file means a missing value, leave the cell empty, or read `NaN` as missing with csv.null_values [\"NaN\"] in dataset.import (mobilis import --null-value 'NaN')"]
        );
    }

    #[test]
    fn columns_without_values_are_numbers_and_noted() {
        let (frame, _) =
            csv_dialect::read_csv(b"sample,thickness_m\nS1,\nS2,\n", &CsvDialect::default(), |_| false).unwrap();
        assert_eq!(
            empty_column_notes(&frame),
            vec!["column `thickness_m` has no value in any row: it was imported as numbers (Float64), every value missing"]
        );
        let columns = json!({"sample": ["S1"], "thickness_m": [null]});
        let frame = frame_from_json_columns(columns.as_object().unwrap()).unwrap();
        assert_eq!(frame.column("thickness_m").unwrap().dtype(), &DataType::Float64);
        assert_eq!(empty_column_notes(&frame).len(), 1);
    }
}
