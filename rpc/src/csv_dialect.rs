//! CSV files as labs write them: the dialect options of `dataset.import` (`csv:
//! {separator, decimal_comma, comment_prefix, skip_rows, header}`) and the scan that checks
//! a file's structure before polars infers its column types.
//!
//! The scan reads the text once, respecting quotes, comment lines and the lines skipped
//! before the header, and keeps the line on which every row starts. A row with too few or
//! too many fields is an error naming its line (a reader that pads short rows with nulls
//! would hide a truncated export). Errors say which option would fix the file: a header
//! that is one field holding `;` asks for that separator, a preamble asks for
//! `comment_prefix` or `skip_rows`. The rows then go to polars as a plain CSV (comma,
//! decimal point, one header line) for type inference, so every data row of the frame maps
//! back to its line in the file ([`SourceMap`]).
//!
//! Conventions of the scan (common practice for CSV, cf. RFC 4180): fields in double quotes
//! may hold the separator, line breaks and doubled quotes; unquoted fields are trimmed of
//! surrounding blanks; blank lines are skipped; a UTF-8 byte-order mark is dropped; header
//! names are trimmed, and an empty one becomes `column_N`.
//!
//! # Options and what the scan checks
//!
//! The options (CLI: `--separator`, `--decimal-comma`, `--comment-prefix`, `--skip-rows`,
//! `--no-header`) describe the dialect. The scan skips the first `skip_rows` lines, blank
//! lines, and lines starting with `comment_prefix` wherever they stand. It then stops at the
//! first structural problem, each an error naming its line and the option that fixes it:
//!
//! - a header that is one field holding another separator (`csv.separator`);
//! - a preamble, leading rows with another field count than the table (`comment_prefix` or
//!   `skip_rows`, with the count of lines to skip);
//! - a row with another number of fields than the header (never padded with nulls).
//!
//! Parser messages of polars never reach the user for these problems. With `decimal_comma`
//! the rewrite for polars turns the comma into a point in unquoted cells that read as numbers
//! with a decimal comma, except in a column named `contacts` after `rename` (its pair notation
//! `21,34` looks like one). Without a header the columns are `column_1`, `column_2`, ...
//!
//! # The plain-file path
//!
//! A file in the default dialect that is already the plain CSV the scan would produce
//! (distinct header names without surrounding blanks; no quotes, blanks, carriage returns or
//! blank lines; every row with the header's field count) skips the scan and goes to polars as
//! it is, after one pass over its bytes that checks exactly that (`plain_file_rows`); its
//! rows are then on lines 2, 3, ... Every other file, every file the scan would refuse
//! included, takes the scan, so the errors above are the same either way, and so is the frame
//! (a unit test reads plain files both ways).

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use polars::prelude::*;
use std::io::Cursor;

/// How a CSV file is written: a member of `dataset.import`'s params, defined by the protocol.
pub use mobilis_protocol::params::CsvDialect;

/// The separator as one character, or an error saying what is accepted.
pub fn separator_char(dialect: &CsvDialect) -> ServiceResult<char> {
    let text = dialect.separator.as_str();
    let character = match text {
        "tab" | "\\t" => Some('\t'),
        _ => {
            let mut chars = text.chars();
            match (chars.next(), chars.next()) {
                (Some(c), None) => Some(c),
                _ => None,
            }
        }
    };
    match character {
        Some('"') | Some('\n') | Some('\r') | None => Err(ServiceError::invalid_params(format!(
            "csv.separator is `{text}`; it must be one character other than a quote or a line break"
        ))
        .with_help("for example \",\", \";\", \"tab\" or \"|\" (mobilis import --separator ';')")),
        Some(c) => Ok(c),
    }
}

/// The dialect's separator, once the dialect is found consistent.
fn check(dialect: &CsvDialect) -> ServiceResult<char> {
    let separator = separator_char(dialect)?;
    if dialect.decimal_comma && separator == ',' {
        return Err(ServiceError::invalid_params(
                "csv.decimal_comma needs a separator other than `,`: a comma cannot both part fields and numbers",
            )
            .with_help("files with decimal commas are usually separated by `;`: csv.separator \";\" (mobilis import --separator ';')"));
    }
    if let Some(prefix) = &dialect.comment_prefix {
        if prefix.trim().is_empty() {
            return Err(
                ServiceError::invalid_params("csv.comment_prefix must not be empty or blank")
                    .with_help("for example \"#\" (mobilis import --comment-prefix '#')"),
            );
        }
    }
    Ok(separator)
}

/// Where the rows and columns of an imported frame came from in the file.
#[derive(Debug, Clone, PartialEq)]
pub struct SourceMap {
    /// The line (counted from 1) on which each data row starts.
    pub lines: Vec<usize>,
    /// The line of the header, if the file has one.
    pub header_line: Option<usize>,
    /// The dialect the file was read with.
    pub decimal_comma: bool,
}

impl SourceMap {
    /// "line 7, column 3" for a row of the frame and a field position (from 0).
    pub fn locate(&self, row: usize, field: usize) -> String {
        match self.lines.get(row) {
            Some(line) => format!("line {line}, column {}", field + 1),
            None => format!("row {}, column {}", row + 1, field + 1),
        }
    }
}

struct Field {
    text: String,
    quoted: bool,
}

struct Record {
    line: usize,
    /// The text of the record's first line, as written.
    raw: String,
    fields: Vec<Field>,
}

fn file_error(message: String) -> ServiceError {
    ServiceError::new(ErrorKind::FileProblem, message)
}

/// Splits the text into records of fields, skipping the first `skip_rows` lines, blank
/// lines and comment lines; keeps each record's first line.
fn scan(text: &str, separator: char, dialect: &CsvDialect) -> ServiceResult<Vec<Record>> {
    let trim_blanks = |s: &str| -> String {
        s.trim_matches(|c: char| (c == ' ' || c == '\t') && c != separator)
            .to_owned()
    };
    let mut records = Vec::new();
    let bytes_lines: Vec<&str> = text.split('\n').collect();
    let mut index = 0;
    while index < bytes_lines.len() {
        let line_number = index + 1;
        let line = bytes_lines[index].strip_suffix('\r').unwrap_or(bytes_lines[index]);
        if index < dialect.skip_rows as usize || line.trim().is_empty() {
            index += 1;
            continue;
        }
        if let Some(prefix) = &dialect.comment_prefix {
            if line.trim_start().starts_with(prefix.as_str()) {
                index += 1;
                continue;
            }
        }
        // One record, which may continue over further lines inside quotes.
        let mut fields = Vec::new();
        let mut current = String::new();
        let mut quoted = false;
        let mut in_quotes = false;
        let mut at_field_start = true;
        let mut line_text = line;
        loop {
            let mut chars = line_text.chars().peekable();
            while let Some(c) = chars.next() {
                if in_quotes {
                    if c == '"' {
                        if chars.peek() == Some(&'"') {
                            chars.next();
                            current.push('"');
                        } else {
                            in_quotes = false;
                        }
                    } else {
                        current.push(c);
                    }
                } else if c == separator {
                    let text = if quoted {
                        std::mem::take(&mut current)
                    } else {
                        trim_blanks(&std::mem::take(&mut current))
                    };
                    fields.push(Field { text, quoted });
                    quoted = false;
                    at_field_start = true;
                } else if c == '"' && at_field_start && current.trim().is_empty() {
                    current.clear();
                    quoted = true;
                    in_quotes = true;
                    at_field_start = false;
                } else {
                    if !(c == ' ' || c == '\t') {
                        at_field_start = false;
                    }
                    current.push(c);
                }
            }
            if !in_quotes {
                break;
            }
            index += 1;
            if index >= bytes_lines.len() {
                return Err(file_error(format!(
                    "line {line_number}: a quoted field opened on this line is never closed"
                ))
                .with_help("close the quote (\"), or double a quote inside a quoted field (\"\")"));
            }
            current.push('\n');
            line_text = bytes_lines[index].strip_suffix('\r').unwrap_or(bytes_lines[index]);
        }
        let text = if quoted { current } else { trim_blanks(&current) };
        fields.push(Field { text, quoted });
        records.push(Record {
            line: line_number,
            raw: line.to_owned(),
            fields,
        });
        index += 1;
    }
    Ok(records)
}

/// How the options in an error's help are spelled, for both kinds of client.
fn option_help(rpc: &str, cli: &str) -> String {
    format!("{rpc} in dataset.import (mobilis import {cli})")
}

/// Explains a header that is one field: the wrong separator.
fn separator_problem(records: &[Record], separator: char) -> Option<ServiceError> {
    let header = records.first()?;
    // A header that is one field holding another separator: the data rows may split at
    // decimal commas, so only the header decides.
    if header.fields.len() != 1 || header.fields[0].quoted {
        return None;
    }
    let text = &header.fields[0].text;
    let candidate = [';', '\t', ',', '|']
        .into_iter()
        .filter(|c| *c != separator)
        .max_by_key(|c| text.matches(*c).count())
        .filter(|c| text.contains(*c))?;
    let shown = if candidate == '\t' {
        "tab".to_owned()
    } else {
        candidate.to_string()
    };
    let quoted_cli = if candidate == '\t' {
        "tab".to_owned()
    } else {
        format!("'{candidate}'")
    };
    Some(
        file_error(format!(
            "line {}: the header is one field, `{}`; the file seems separated by `{shown}`, not `{}`",
            header.line,
            shorten(text),
            if separator == '\t' {
                "tab".to_owned()
            } else {
                separator.to_string()
            }
        ))
        .with_help(format!(
            "set the separator: {}",
            option_help(
                &format!("csv.separator \"{shown}\""),
                &format!("--separator {quoted_cli}")
            )
        )),
    )
}

fn shorten(text: &str) -> String {
    if text.chars().count() > 80 {
        let cut: String = text.chars().take(77).collect();
        format!("{cut}...")
    } else {
        text.to_owned()
    }
}

/// Explains leading rows with another number of fields than the table: a preamble.
fn preamble_problem(records: &[Record], dialect: &CsvDialect) -> Option<ServiceError> {
    let mut counts: std::collections::BTreeMap<usize, usize> = Default::default();
    for record in records {
        *counts.entry(record.fields.len()).or_default() += 1;
    }
    let (&usual, _) = counts.iter().max_by_key(|(count, seen)| (**seen, **count))?;
    let first_table_row = records.iter().position(|r| r.fields.len() == usual)?;
    if first_table_row == 0 || records[0].fields.len() == usual {
        return None;
    }
    // Every row after the first table row has the usual count, or this is not a preamble.
    let later_ragged = records[first_table_row..]
        .iter()
        .filter(|r| r.fields.len() != usual)
        .count();
    if later_ragged * 10 > records.len() - first_table_row {
        return None;
    }
    let table_line = records[first_table_row].line;
    let first = &records[0];
    let commented = records[..first_table_row]
        .iter()
        .map(|r| r.raw.trim_start().chars().next())
        .collect::<Vec<_>>();
    let mut help = format!(
        "skip the {} lines above the header: {}",
        table_line - 1,
        option_help(
            &format!("csv.skip_rows {}", table_line - 1),
            &format!("--skip-rows {}", table_line - 1)
        )
    );
    if dialect.comment_prefix.is_none() {
        if let Some(Some(mark)) = commented.first() {
            if !mark.is_alphanumeric() && commented.iter().all(|c| c == &Some(*mark)) {
                help = format!(
                    "the lines above the header start with `{mark}`: mark them as comments, {}; or {help}",
                    option_help(
                        &format!("csv.comment_prefix \"{mark}\""),
                        &format!("--comment-prefix '{mark}'")
                    )
                );
            }
        }
    }
    Some(
        file_error(format!(
            "line {} has {} field{}, but the table from line {table_line} on has {usual}: the file seems to begin with a preamble (`{}`)",
            first.line,
            first.fields.len(),
            if first.fields.len() == 1 { "" } else { "s" },
            shorten(&first.raw)
        ))
        .with_help(help),
    )
}

fn looks_like_decimal_comma(text: &str) -> bool {
    let text = text.trim();
    let body = text.strip_prefix(['-', '+']).unwrap_or(text);
    let (mantissa, exponent) = match body.find(['e', 'E']) {
        Some(at) => (&body[..at], Some(&body[at + 1..])),
        None => (body, None),
    };
    let Some((whole, fraction)) = mantissa.split_once(',') else {
        return false;
    };
    let digits = |s: &str| s.chars().all(|c| c.is_ascii_digit());
    let exponent_ok = exponent.is_none_or(|e| {
        let e = e.strip_prefix(['-', '+']).unwrap_or(e);
        !e.is_empty() && digits(e)
    });
    (!whole.is_empty() || !fraction.is_empty()) && digits(whole) && digits(fraction) && exponent_ok
}

/// Whether a text cell reads as a number written with a decimal comma (`1,5`, `-2,3e-4`).
pub fn is_decimal_comma_number(text: &str) -> bool {
    looks_like_decimal_comma(text)
}

/// Writes one field of the plain CSV handed to polars.
fn push_plain(out: &mut String, field: &Field, decimal_comma: bool) {
    if field.text.is_empty() {
        if field.quoted {
            out.push_str("\"\"");
        }
        return;
    }
    let text = if decimal_comma && !field.quoted && looks_like_decimal_comma(&field.text) {
        field.text.replace(',', ".")
    } else {
        field.text.clone()
    };
    if text.contains([',', '"', '\n', '\r']) || text.starts_with(' ') || text.ends_with(' ') {
        out.push('"');
        out.push_str(&text.replace('"', "\"\""));
        out.push('"');
    } else {
        out.push_str(&text);
    }
}

/// Hands a plain CSV (comma, decimal point, one header line) to polars.
fn polars_read(plain: &[u8]) -> ServiceResult<DataFrame> {
    let read = |infer_rows: Option<usize>| {
        CsvReadOptions::default()
            .with_has_header(true)
            .with_infer_schema_length(infer_rows)
            .into_reader_with_file_handle(Cursor::new(plain))
            .finish()
    };
    // Types from the first 10 000 rows; a later row that does not fit them (a text cell
    // far down a numeric column) makes the whole file decide.
    read(Some(10_000)).or_else(|_| read(None)).map_err(|error| {
        file_error(format!("the rows could not be turned into columns: {error}"))
            .with_help("check the file's rows for values that break the table's columns")
    })
}

/// The number of data rows when `text` is already the plain CSV that the scan would hand
/// to polars, so that the scan and the rewrite can be skipped: the default dialect, a
/// header of distinct, non-empty names without surrounding blanks, and data lines free of
/// quotes, blanks and carriage returns, none of them empty, each with as many fields as
/// the header. Every row then starts on its own line, the header on line 1. Anything else
/// (including every file the scan would refuse) takes the scan, which explains it.
///
/// One pass over the bytes, which costs a fraction of the scan's per-field strings: for a
/// million rows of readings, tens of milliseconds instead of about a second.
fn plain_file_rows(text: &str, dialect: &CsvDialect) -> Option<usize> {
    if *dialect != CsvDialect::default() {
        return None;
    }
    let (header, data) = text.split_once('\n')?;
    if header.contains(['"', '\r']) {
        return None;
    }
    let names: Vec<&str> = header.split(',').collect();
    let distinct = names
        .iter()
        .enumerate()
        .all(|(position, name)| !names[..position].contains(name));
    let clean = names
        .iter()
        .all(|name| !name.is_empty() && name.trim_matches([' ', '\t']) == *name);
    if names.len() < 2 || !distinct || !clean {
        return None;
    }
    let separators_per_row = names.len() - 1;
    let mut rows = 0usize;
    let mut separators = 0usize;
    let mut line_length = 0usize;
    for &byte in data.as_bytes() {
        match byte {
            b',' => separators += 1,
            b'\n' => {
                if line_length == 0 || separators != separators_per_row {
                    return None;
                }
                rows += 1;
                separators = 0;
                line_length = 0;
                continue;
            }
            b'"' | b'\r' | b' ' | b'\t' => return None,
            _ => {}
        }
        line_length += 1;
    }
    if line_length > 0 {
        if separators != separators_per_row {
            return None;
        }
        rows += 1;
    }
    (rows > 0).then_some(rows)
}

/// Reads CSV bytes in the given dialect into a frame, with the line of every row.
///
/// With `decimal_comma`, unquoted cells that read as numbers with a decimal comma become
/// numbers, except in the columns for which `keeps_commas` (given the header name) is true:
/// the `contacts` pair notation (`21,34`) looks like such a number.
pub fn read_csv(
    bytes: &[u8],
    dialect: &CsvDialect,
    keeps_commas: impl Fn(&str) -> bool,
) -> ServiceResult<(DataFrame, SourceMap)> {
    let separator = check(dialect)?;
    let text = std::str::from_utf8(bytes).map_err(|error| {
        let line = bytes[..error.valid_up_to()].iter().filter(|b| **b == b'\n').count() + 1;
        file_error(format!(
            "line {line}: the file is not UTF-8 text (a byte there is not valid UTF-8)"
        ))
        .with_help("save the file as UTF-8 (most spreadsheet programs offer \"CSV UTF-8\")")
    })?;
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    if let Some(rows) = plain_file_rows(text, dialect) {
        let frame = polars_read(text.as_bytes())?;
        let map = SourceMap {
            lines: (2..2 + rows).collect(),
            header_line: Some(1),
            decimal_comma: false,
        };
        return Ok((frame, map));
    }
    let records = scan(text, separator, dialect)?;
    if records.is_empty() {
        return Err(file_error(format!(
            "the file has no rows{}",
            if dialect.skip_rows > 0 || dialect.comment_prefix.is_some() {
                " after the skipped and comment lines"
            } else {
                ""
            }
        )));
    }
    if let Some(problem) = separator_problem(&records, separator) {
        return Err(problem);
    }
    if let Some(problem) = preamble_problem(&records, dialect) {
        return Err(problem);
    }
    let width = records[0].fields.len();
    let (names, header_line, data) = if dialect.header {
        let header = &records[0];
        let mut names: Vec<String> = Vec::with_capacity(width);
        for (position, field) in header.fields.iter().enumerate() {
            let name = field.text.trim().to_owned();
            let name = if name.is_empty() {
                format!("column_{}", position + 1)
            } else {
                name
            };
            if let Some(earlier) = names.iter().position(|n| n == &name) {
                return Err(file_error(format!(
                    "line {}: the header names `{name}` twice (columns {} and {})",
                    header.line,
                    earlier + 1,
                    position + 1
                ))
                .with_help("give the columns distinct names in the file; rename can then change them"));
            }
            names.push(name);
        }
        (names, Some(header.line), &records[1..])
    } else {
        ((1..=width).map(|i| format!("column_{i}")).collect(), None, &records[..])
    };
    for record in data {
        if record.fields.len() != width {
            let against = match header_line {
                Some(line) => format!("the header (line {line}) has {width}"),
                None => format!("the first row (line {}) has {width}", records[0].line),
            };
            let mut help = format!(
                "give line {} one field per column; quote a field that contains the separator",
                record.line
            );
            if record.fields.len() > width
                && separator == ','
                && record
                    .fields
                    .iter()
                    .any(|f| !f.quoted && f.text.chars().all(|c| c.is_ascii_digit()))
            {
                help.push_str(&format!(
                    "; a file written with decimal commas (1,5) needs another separator and {}",
                    option_help("csv.decimal_comma true", "--decimal-comma")
                ));
            }
            return Err(file_error(format!(
                "line {} has {} field{}, {against}",
                record.line,
                record.fields.len(),
                if record.fields.len() == 1 { "" } else { "s" },
            ))
            .with_help(help));
        }
    }
    let mut plain = String::with_capacity(text.len() + 64);
    for (position, name) in names.iter().enumerate() {
        if position > 0 {
            plain.push(',');
        }
        push_plain(
            &mut plain,
            &Field {
                text: name.clone(),
                quoted: true,
            },
            false,
        );
    }
    plain.push('\n');
    let convert: Vec<bool> = names
        .iter()
        .map(|n| dialect.decimal_comma && !keeps_commas(n))
        .collect();
    for record in data {
        for (position, field) in record.fields.iter().enumerate() {
            if position > 0 {
                plain.push(',');
            }
            push_plain(&mut plain, field, convert[position]);
        }
        plain.push('\n');
    }
    let frame = polars_read(plain.as_bytes())?;
    let map = SourceMap {
        lines: data.iter().map(|r| r.line).collect(),
        header_line,
        decimal_comma: dialect.decimal_comma,
    };
    Ok((frame, map))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str, dialect: &CsvDialect) -> ServiceResult<(DataFrame, SourceMap)> {
        read_csv(text.as_bytes(), dialect, |name| name == "contacts")
    }

    #[test]
    fn a_plain_file_reads_as_before() {
        let (frame, map) = read("sample,i_in,T\na,1,4.5\nb,2,300\n", &CsvDialect::default()).unwrap();
        assert_eq!(frame.shape(), (2, 3));
        assert_eq!(frame.column("i_in").unwrap().dtype(), &DataType::Int64);
        assert_eq!(frame.column("T").unwrap().dtype(), &DataType::Float64);
        assert_eq!(map.lines, vec![2, 3]);
        assert_eq!(map.header_line, Some(1));
    }

    #[test]
    fn header_names_with_spaces_and_parentheses_are_trimmed_and_kept() {
        let (frame, _) = read("Sample ID, T (C), B (G)\nW1, 25.0, 5000\n", &CsvDialect::default()).unwrap();
        let names: Vec<String> = frame.get_column_names().iter().map(|n| n.to_string()).collect();
        assert_eq!(names, vec!["Sample ID", "T (C)", "B (G)"]);
        assert_eq!(frame.column("T (C)").unwrap().dtype(), &DataType::Float64);
    }

    #[test]
    fn semicolons_and_decimal_commas() {
        let dialect = CsvDialect {
            separator: ";".into(),
            decimal_comma: true,
            ..CsvDialect::default()
        };
        let (frame, _) = read(
            "sample;T;note;contacts\nW1;25,5;\"1,5\";\"21,34\"\nW2;-1,5e-3;x;21,34\n",
            &dialect,
        )
        .unwrap();
        let t: Vec<f64> = frame.column("T").unwrap().f64().unwrap().into_no_null_iter().collect();
        assert_eq!(t, vec![25.5, -1.5e-3]);
        // A quoted cell keeps its comma, and so does the contacts notation.
        let notes: Vec<&str> = frame.column("note").unwrap().str().unwrap().iter().flatten().collect();
        assert_eq!(notes, vec!["1,5", "x"]);
        let contacts: Vec<&str> = frame
            .column("contacts")
            .unwrap()
            .str()
            .unwrap()
            .iter()
            .flatten()
            .collect();
        assert_eq!(contacts, vec!["21,34", "21,34"]);
    }

    #[test]
    fn comments_skipped_lines_blank_lines_and_quotes_keep_the_line_numbers() {
        let text = "Station export\nrun 7\n# operator: A\nsample,note,value\n\na,\"two\nlines\",1\n# pause\nb,\"say \"\"hi\"\"\",2\n";
        let dialect = CsvDialect {
            skip_rows: 2,
            comment_prefix: Some("#".into()),
            ..CsvDialect::default()
        };
        let (frame, map) = read(text, &dialect).unwrap();
        assert_eq!(map.header_line, Some(4));
        assert_eq!(map.lines, vec![6, 9]);
        let notes: Vec<&str> = frame.column("note").unwrap().str().unwrap().iter().flatten().collect();
        assert_eq!(notes, vec!["two\nlines", "say \"hi\""]);
    }

    #[test]
    fn no_header_names_the_columns_by_position() {
        let dialect = CsvDialect {
            header: false,
            ..CsvDialect::default()
        };
        let (frame, map) = read("a,1\nb,2\n", &dialect).unwrap();
        let names: Vec<String> = frame.get_column_names().iter().map(|n| n.to_string()).collect();
        assert_eq!(names, vec!["column_1", "column_2"]);
        assert_eq!(map.lines, vec![1, 2]);
    }

    #[test]
    fn a_ragged_row_is_an_error_naming_its_line() {
        let error = read("a,b,c\n1,2,3\n4,5\n6,7,8\n", &CsvDialect::default()).unwrap_err();
        assert_eq!(error.message, "line 3 has 2 fields, the header (line 1) has 3");
        let error = read("a,b,c\n1,2,3\n4,5,6,7\n", &CsvDialect::default()).unwrap_err();
        assert!(error.message.starts_with("line 3 has 4 fields"), "{}", error.message);
        assert!(!error.message.contains("truncate_ragged_lines"));
    }

    #[test]
    fn a_semicolon_file_read_with_commas_asks_for_the_separator() {
        let error = read("Sample ID;T (C);B (G)\nW1;25;5000\n", &CsvDialect::default()).unwrap_err();
        assert!(error.message.contains("the header is one field"), "{}", error.message);
        let help = error.help.unwrap();
        assert!(
            help.contains("--separator ';'") && help.contains("csv.separator \";\""),
            "{help}"
        );
    }

    #[test]
    fn a_preamble_asks_for_comment_prefix_or_skip_rows() {
        let text = "# Station export\n# wafer lot 12\nsample,T,B\nW1,25,5000\nW2,26,5000\n";
        let error = read(text, &CsvDialect::default()).unwrap_err();
        assert!(error.message.starts_with("line 1 has 1 field"), "{}", error.message);
        let help = error.help.unwrap();
        assert!(
            help.contains("--comment-prefix '#'") && help.contains("--skip-rows 2"),
            "{help}"
        );
        let text = "Station export\nsample,T,B\nW1,25,5000\n";
        let help = read(text, &CsvDialect::default()).unwrap_err().help.unwrap();
        assert!(help.contains("--skip-rows 1") && !help.contains("comment"), "{help}");
    }

    #[test]
    fn dialect_mistakes_are_explained() {
        let both = CsvDialect {
            decimal_comma: true,
            ..CsvDialect::default()
        };
        assert!(read("a\n1\n", &both).unwrap_err().message.contains("decimal_comma"));
        let long = CsvDialect {
            separator: ";;".into(),
            ..CsvDialect::default()
        };
        assert!(read("a\n1\n", &long).unwrap_err().message.contains("one character"));
        let error = read("a,b\n1,\"open\n", &CsvDialect::default()).unwrap_err();
        assert!(error.message.contains("line 2: a quoted field"), "{}", error.message);
        let error = read_csv(b"a,b\n1,2\n\xff,3\n", &CsvDialect::default(), |_| false).unwrap_err();
        assert!(
            error.message.starts_with("line 3: the file is not UTF-8"),
            "{}",
            error.message
        );
        let error = read("a,b,a\n1,2,3\n", &CsvDialect::default()).unwrap_err();
        assert!(
            error.message.contains("names `a` twice (columns 1 and 3)"),
            "{}",
            error.message
        );
    }

    #[test]
    fn decimal_comma_numbers_are_recognised() {
        for yes in ["1,5", "-2,25", "+0,1e-3", ",5", "12,"] {
            assert!(is_decimal_comma_number(yes), "{yes}");
        }
        for no in ["1.5", "abc", "1,5,6", "1,5x", "", ","] {
            assert!(!is_decimal_comma_number(no), "{no}");
        }
    }

    #[test]
    fn plain_files_skip_the_scan_and_read_as_the_scan_would() {
        // A comment prefix that no line uses takes the scan on the same text.
        let scanned = CsvDialect {
            comment_prefix: Some("#".into()),
            ..CsvDialect::default()
        };
        let plain = [
            "sample,temperature (K),i_in,x\nW1,4.5,1,\nW2,300,2,7e-3\nW3,1e2,3,-0",
            "a,b\n1,2",
        ];
        for text in plain {
            assert!(plain_file_rows(text, &CsvDialect::default()).is_some(), "{text}");
            let (fast, fast_map) = read(text, &CsvDialect::default()).unwrap();
            let (slow, slow_map) = read(text, &scanned).unwrap();
            assert!(fast.equals_missing(&slow), "{text}: {fast} {slow}");
            assert_eq!(fast.dtypes(), slow.dtypes());
            assert_eq!(fast_map, slow_map);
        }
        // Quotes, blanks, blank lines, ragged rows, carriage returns and odd headers go
        // through the scan.
        for text in [
            "a,b\n\"1\",2\n",
            "a,b\n1, 2\n",
            "a,b\n1,2\n\n3,4\n",
            "a,b\n1,2,3\n",
            "a,b\r\n1,2\r\n",
            "a, b\n1,2\n",
            "a,a\n1,2\n",
            "a,\n1,2\n",
            "a;b\n1;2\n",
            "a,b\n",
        ] {
            assert!(plain_file_rows(text, &CsvDialect::default()).is_none(), "{text:?}");
        }
    }

    #[test]
    fn a_late_text_cell_does_not_break_type_inference() {
        let mut text = String::from("sample,T\n");
        for row in 0..10_050 {
            text += &format!(
                "a,{}\n",
                if row == 10_020 {
                    "n/a".to_owned()
                } else {
                    row.to_string()
                }
            );
        }
        let (frame, map) = read(&text, &CsvDialect::default()).unwrap();
        assert_eq!(frame.height(), 10_050);
        assert_eq!(frame.column("T").unwrap().dtype(), &DataType::String);
        assert_eq!(map.lines[10_020], 10_022);
    }
}
