//! CSV files as labs write them: the dialect options of `dataset.import` (`csv:
//! {separator, decimal_comma, comment_prefix, skip_rows, header, null_values}`) and the
//! scan that checks a file's structure before polars infers its column types.
//!
//! The scan reads the text once, respecting quotes, comment lines and the lines skipped
//! before the header, and keeps the line on which every row starts. A row with too few or
//! too many fields is an error naming its line (a reader that pads short rows with nulls
//! would hide a truncated export). Errors say which option would fix the file: a header
//! that is one field holding `;` asks for that separator, a preamble asks for
//! `comment_prefix` or `skip_rows`, and a header that reads as data is refused. The rows
//! then go to polars as a plain CSV (comma, decimal point, one header line) for type
//! inference, so every data row of the frame maps back to its line in the file
//! ([`SourceMap`]). A column with no value in any row has nothing to infer a type from; it
//! becomes a Float64 column of nulls ([`empty_columns_as_numbers`]), because such a column
//! in a lab's table is a quantity nobody measured (a sheet's `thickness_m` left empty for 2D
//! samples, a 2D result exported and read back), not text.
//!
//! Conventions of the scan (common practice for CSV, cf. RFC 4180): fields in double quotes
//! may hold the separator, line breaks and doubled quotes; unquoted fields are trimmed of
//! surrounding blanks; blank lines are skipped; a UTF-8 byte-order mark is dropped; header
//! names are trimmed, and an empty one becomes `column_N`.
//!
//! # Options and what the scan checks
//!
//! The options (CLI: `--separator`, `--decimal-comma`, `--comment-prefix`, `--skip-rows`,
//! `--no-header`, `--null-value`) describe the dialect. `null_values` lists the texts the
//! file writes for a missing value (`n/a`, `--`): an unquoted data cell that is exactly one
//! of them, after trimming, is handed to polars empty, so it reads as missing as an empty
//! cell does; quoted cells and the header are left as written. Nothing is read as missing
//! unless the file's dialect says so. The scan skips the first `skip_rows` lines, blank
//! lines, and lines starting with `comment_prefix` wherever they stand. It then stops at the
//! first structural problem, each an error naming its line and the option that fixes it:
//!
//! - a header that is one field holding another separator (`csv.separator`);
//! - a preamble, leading rows with another field count than the table (`comment_prefix` or
//!   `skip_rows`, with the count of lines to skip);
//! - a row with another number of fields than the header (never padded with nulls);
//! - a header that looks like a row of data: at least half of its cells read as numbers,
//!   split by the separator or by another likely one (a wrong `skip_rows` that made the
//!   first data row the header, `S1;26,85;0,2`, or a file without a header, which needs
//!   `header: false`). Column names are words; taking a data row as names would lose its
//!   values and name the columns after them.
//!
//! # The help: the file's layout
//!
//! The help of these errors gives every option the file needs at once, found from the text
//! alone (`sniff_layout`, on its first 1000 lines): for the dialect's separator and each
//! likely one (`,`, `;`, tab, `|`) the table the records form (from the first record after
//! which nine in ten have the field count most records have), and the separator whose
//! table covers the most records, then holds the most cells that read as numbers, is the
//! file's. A wrong separator either leaves the
//! header out of the table (a `;` header is one field by `,`) or splits numbers apart
//! (`26,85` by `,`), so both counts favour the right one. The table's first line is the
//! header (unless it looks like data: then `header: false`); the lines above it are
//! skipped by `comment_prefix` when they all start with one mark such as `#` (with
//! `skip_rows`, counted in lines of the file, as the alternative), else by `skip_rows`; and
//! `decimal_comma` is added when cells read as numbers only with a decimal comma. A file
//! whose table is separated by another character than the dialect's gets that error
//! instead of the preamble or ragged-row error the wrong separator would give:
//!
//! ```text
//! the table seems to begin on line 3 (`sample;T;V`) and to be separated by `;`, not `,`
//! help: its header is line 3; read it with csv.separator ";", csv.comment_prefix "#",
//!       csv.decimal_comma true in dataset.import (mobilis import --separator ';'
//!       --comment-prefix '#' --decimal-comma); or, instead of the comment prefix, skip the
//!       2 lines above the header: csv.skip_rows 2 (--skip-rows 2)
//! ```
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
//! blank lines; every row with the header's field count; a header that does not read as
//! data) skips the scan and goes to polars as
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
    if dialect.null_values.iter().any(|text| text.trim().is_empty()) {
        return Err(ServiceError::invalid_params(
            "csv.null_values holds an empty or blank text; empty cells are missing values already",
        )
        .with_help("list the texts the file writes for a missing value, e.g. [\"n/a\", \"--\"] (mobilis import --null-value 'n/a')"));
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

/// Explains a header that is one field: the wrong separator. The help gives every option
/// the file needs at once when its layout is found ([`sniff_layout`]).
fn separator_problem(
    records: &[Record],
    separator: char,
    layout: impl FnOnce() -> Option<Layout>,
    dialect: &CsvDialect,
) -> Option<ServiceError> {
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
    let shown = separator_name(candidate);
    let help = match layout().filter(|layout| layout.separator != separator) {
        Some(layout) => layout.help(dialect),
        None => format!(
            "set the separator: {}",
            option_help(
                &format!("csv.separator \"{shown}\""),
                &format!("--separator {}", cli_separator(candidate))
            )
        ),
    };
    Some(
        file_error(format!(
            "line {}: the header is one field, `{}`; the file seems separated by `{shown}`, not `{}`",
            header.line,
            shorten(text),
            separator_name(separator)
        ))
        .with_help(help),
    )
}

/// A separator as the options spell it: the character, or `tab`.
fn separator_name(separator: char) -> String {
    if separator == '\t' {
        "tab".to_owned()
    } else {
        separator.to_string()
    }
}

/// A separator as a shell argument of the CLI.
fn cli_separator(separator: char) -> String {
    if separator == '\t' {
        "tab".to_owned()
    } else {
        format!("'{separator}'")
    }
}

fn shorten(text: &str) -> String {
    if text.chars().count() > 80 {
        let cut: String = text.chars().take(77).collect();
        format!("{cut}...")
    } else {
        text.to_owned()
    }
}

/// Explains leading rows with another number of fields than the table: a preamble. When
/// the file's layout is found ([`sniff_layout`]) and its table is separated by another
/// character than the dialect's, that is the problem named; otherwise the preamble, with
/// every option the file needs in the help.
fn preamble_problem(
    records: &[Record],
    separator: char,
    layout: impl FnOnce() -> Option<Layout>,
    dialect: &CsvDialect,
) -> Option<ServiceError> {
    let table = find_table(records)?;
    let first = &records[0];
    if table.start == 0 || first.fields.len() == table.width {
        return None;
    }
    let layout = layout();
    if let Some(layout) = layout.as_ref().filter(|layout| layout.separator != separator) {
        return Some(layout.other_separator(separator, dialect));
    }
    let (table_line, help) = match &layout {
        Some(layout) => (layout.table_line, layout.help(dialect)),
        None => {
            let table_line = records[table.start].line;
            let skip = table_line - 1;
            let help = format!(
                "skip the {skip} lines above the header: {}",
                option_help(&format!("csv.skip_rows {skip}"), &format!("--skip-rows {skip}"))
            );
            (table_line, help)
        }
    };
    Some(
        file_error(format!(
            "line {} has {} field{}, but the table from line {table_line} on has {}: the file seems to begin with a preamble (`{}`)",
            first.line,
            first.fields.len(),
            if first.fields.len() == 1 { "" } else { "s" },
            table.width,
            shorten(&first.raw)
        ))
        .with_help(help),
    )
}

/// Where the table of a list of records begins: from `start` on, all but at most one record
/// in ten have `width` fields, the count most records have.
struct Table {
    start: usize,
    width: usize,
}

fn find_table(records: &[Record]) -> Option<Table> {
    let mut counts: std::collections::BTreeMap<usize, usize> = Default::default();
    for record in records {
        *counts.entry(record.fields.len()).or_default() += 1;
    }
    let (&width, _) = counts.iter().max_by_key(|(count, seen)| (**seen, **count))?;
    // The earliest record of that width after which the other widths are at most a tenth.
    let mut ragged_after = vec![0usize; records.len() + 1];
    for index in (0..records.len()).rev() {
        ragged_after[index] = ragged_after[index + 1] + usize::from(records[index].fields.len() != width);
    }
    let start = (0..records.len())
        .find(|&index| records[index].fields.len() == width && ragged_after[index] * 10 <= records.len() - index)?;
    Some(Table { start, width })
}

/// How many lines of a file [`sniff_layout`] reads.
const SNIFFED_LINES: usize = 1000;

/// The separators lab exports commonly use, tried in turn to find a file's layout.
const LIKELY_SEPARATORS: [char; 4] = [',', ';', '\t', '|'];

/// How a file seems to be written, found from its text alone ([`sniff_layout`]).
#[derive(Debug, Clone, PartialEq)]
struct Layout {
    separator: char,
    /// The line (from 1) of the table's first row: its header, if `header`.
    table_line: usize,
    /// The text of that line.
    table_raw: String,
    /// The mark every non-blank line above the table starts with, if they share one that
    /// is not a letter or digit (`#`, `%`, `!`).
    comment_mark: Option<char>,
    /// Whether the lines above the table are all blank or comments of the dialect's prefix.
    nothing_to_skip: bool,
    /// Whether number cells are written with a decimal comma (`26,85`).
    decimal_comma: bool,
    /// Whether the table's first row names its columns (it does unless it looks like data).
    header: bool,
}

impl Layout {
    /// The error for a file whose table is separated by another character than the
    /// dialect's.
    fn other_separator(&self, separator: char, dialect: &CsvDialect) -> ServiceError {
        file_error(format!(
            "the table seems to begin on line {} (`{}`) and to be separated by `{}`, not `{}`",
            self.table_line,
            shorten(&self.table_raw),
            separator_name(self.separator),
            separator_name(separator)
        ))
        .with_help(self.help(dialect))
    }

    /// Every option the file needs, at once, in both spellings: `read it with csv.separator
    /// ";", csv.comment_prefix "#", csv.decimal_comma true in dataset.import (mobilis import
    /// --separator ';' --comment-prefix '#' --decimal-comma)`.
    fn help(&self, dialect: &CsvDialect) -> String {
        let mut rpc = Vec::new();
        let mut cli = Vec::new();
        if self.separator != ',' || separator_char(dialect).ok() != Some(',') {
            rpc.push(format!("csv.separator \"{}\"", separator_name(self.separator)));
            cli.push(format!("--separator {}", cli_separator(self.separator)));
        }
        let skip = self.table_line - 1;
        let mut instead = String::new();
        if let Some(prefix) = &dialect.comment_prefix {
            rpc.push(format!("csv.comment_prefix \"{prefix}\""));
            cli.push(format!("--comment-prefix '{prefix}'"));
        }
        if self.nothing_to_skip {
            if dialect.skip_rows > 0 {
                rpc.push("csv.skip_rows 0".to_owned());
                cli.push("--skip-rows 0".to_owned());
            }
        } else {
            match self
                .comment_mark
                .filter(|_| dialect.skip_rows == 0 && dialect.comment_prefix.is_none())
            {
                Some(mark) => {
                    rpc.push(format!("csv.comment_prefix \"{mark}\""));
                    cli.push(format!("--comment-prefix '{mark}'"));
                    instead = format!(
                        "; or, instead of the comment prefix, skip the {skip} line{} above the header: csv.skip_rows {skip} (--skip-rows {skip})",
                        if skip == 1 { "" } else { "s" }
                    );
                }
                None => {
                    rpc.push(format!("csv.skip_rows {skip}"));
                    cli.push(format!("--skip-rows {skip}"));
                }
            }
        }
        if self.decimal_comma {
            rpc.push("csv.decimal_comma true".to_owned());
            cli.push("--decimal-comma".to_owned());
        }
        if !self.header {
            rpc.push("csv.header false".to_owned());
            cli.push("--no-header".to_owned());
        }
        let header = if self.header {
            format!("its header is line {}", self.table_line)
        } else {
            format!("it has no header; its first row is line {}", self.table_line)
        };
        format!(
            "{header}; read it with {}{instead}",
            option_help(&rpc.join(", "), &cli.join(" "))
        )
    }
}

/// Finds how a file is written: for the dialect's separator and each likely one, the table
/// the file's records form ([`find_table`], at least two fields wide), and the separator
/// whose table covers the most records, then holds the most cells that read as numbers,
/// wins. A wrong separator either leaves the header out of the table (`;` header,
/// comma-split data rows) or splits numbers apart (`26,85` read by `,`), so both counts
/// favour the right one. The dialect's comment prefix is honoured, its skip_rows not: the
/// layout says where the table begins in the file. Only the first [`SNIFFED_LINES`] lines
/// are read: the layout shows at the top, and an error on a large file stays quick.
fn sniff_layout(text: &str, dialect: &CsvDialect) -> Option<Layout> {
    let unskipped = CsvDialect {
        skip_rows: 0,
        comment_prefix: dialect.comment_prefix.clone(),
        ..CsvDialect::default()
    };
    let top = match text.match_indices('\n').nth(SNIFFED_LINES) {
        Some((end, _)) => &text[..end],
        None => text,
    };
    let own = separator_char(dialect)
        .ok()
        .filter(|own| !LIKELY_SEPARATORS.contains(own));
    let mut best: Option<((usize, usize), Layout)> = None;
    for separator in own.into_iter().chain(LIKELY_SEPARATORS) {
        let Ok(records) = scan(top, separator, &unskipped) else {
            continue;
        };
        let Some(table) = find_table(&records) else {
            continue;
        };
        if table.width < 2 {
            continue;
        }
        let rows = &records[table.start..];
        let numbers = rows[1..]
            .iter()
            .flat_map(|r| &r.fields)
            .filter(|f| !f.quoted && reads_as_number(&f.text))
            .count();
        let score = (rows.len(), numbers);
        if best.as_ref().is_some_and(|(best_score, _)| *best_score >= score) {
            continue;
        }
        let first = &rows[0];
        let header = !fields_look_like_data(first.fields.iter().map(|f| f.text.as_str()));
        let data = if header { &rows[1..] } else { rows };
        let contacts = if header {
            first.fields.iter().position(|f| f.text.trim() == "contacts")
        } else {
            None
        };
        let decimal_comma = separator != ','
            && data.iter().any(|r| {
                r.fields.iter().enumerate().any(|(position, f)| {
                    Some(position) != contacts
                        && !f.quoted
                        && looks_like_decimal_comma(&f.text)
                        && f.text.trim().parse::<f64>().is_err()
                })
            });
        let above: Vec<&str> = text
            .split('\n')
            .take(first.line - 1)
            .map(|line| line.trim())
            .filter(|line| !line.is_empty())
            .collect();
        let commented = |line: &&str| {
            dialect
                .comment_prefix
                .as_deref()
                .is_some_and(|prefix| line.starts_with(prefix))
        };
        let nothing_to_skip = above.iter().all(commented);
        let marks: Vec<Option<char>> = above
            .iter()
            .filter(|line| !commented(line))
            .map(|line| line.chars().next())
            .collect();
        let comment_mark = match marks.first() {
            Some(&Some(mark)) if !mark.is_alphanumeric() && marks.iter().all(|m| *m == Some(mark)) => Some(mark),
            _ => None,
        };
        let layout = Layout {
            separator,
            table_line: first.line,
            table_raw: first.raw.clone(),
            comment_mark,
            nothing_to_skip,
            decimal_comma,
            header,
        };
        best = Some((score, layout));
    }
    best.map(|(_, layout)| layout)
}

/// Whether a cell reads as a finite number, with a decimal point or a decimal comma.
fn reads_as_number(text: &str) -> bool {
    let text = text.trim();
    !text.is_empty() && (text.parse::<f64>().is_ok_and(f64::is_finite) || looks_like_decimal_comma(text))
}

/// Whether the cells of a row read as data rather than as column names: at least half of
/// them are numbers. Column names are words (`sample`, `T (K)`, `V+`); a header of
/// numbers is a data row read as the header, a wrong skip_rows or a file without a header.
fn fields_look_like_data<'a>(cells: impl Iterator<Item = &'a str>) -> bool {
    let (mut count, mut numbers) = (0usize, 0usize);
    for cell in cells {
        count += 1;
        numbers += usize::from(reads_as_number(cell));
    }
    count > 0 && numbers * 2 >= count
}

/// Whether the header line looks like a row of data: its cells, split by the separator or
/// by any other likely separator (a header read with the wrong separator keeps the right
/// one inside its names, `S1;26`), are at least half numbers.
fn header_looks_like_data(raw: &str, separator: char) -> bool {
    std::iter::once(separator)
        .chain(LIKELY_SEPARATORS)
        .any(|candidate| fields_look_like_data(raw.split(candidate)))
}

/// Refuses a header that looks like a row of data, which a wrong `skip_rows` (or a file
/// without a header) gives: taken as names, its values would be lost, and the columns named
/// after them.
fn header_problem(
    header: &Record,
    separator: char,
    layout: impl FnOnce() -> Option<Layout>,
    dialect: &CsvDialect,
) -> Option<ServiceError> {
    if !header_looks_like_data(&header.raw, separator) {
        return None;
    }
    let help = match layout() {
        Some(layout) => layout.help(dialect),
        None => format!(
            "start at the header line (csv.skip_rows), or read a file without a header with {}",
            option_help("csv.header false", "--no-header")
        ),
    };
    Some(
        file_error(format!(
            "line {}: the header, `{}`, looks like a row of data (numbers where column names belong); {}",
            header.line,
            shorten(&header.raw),
            if dialect.skip_rows > 0 {
                format!("csv.skip_rows {} may skip the real header", dialect.skip_rows)
            } else {
                "the file may have no header, or its header may be further down".to_owned()
            }
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

/// `frame` with every column that has no value in any row as a Float64 column of nulls.
/// Type inference has nothing to go by in such a column and makes it text, but an empty
/// column in a lab's table is a quantity nobody measured (a sheet's `thickness_m` left
/// empty for 2D samples, an export's column of nulls), which an analysis reads as numbers.
pub fn empty_columns_as_numbers(frame: DataFrame) -> ServiceResult<DataFrame> {
    let rows = frame.height();
    if rows == 0 {
        return Ok(frame);
    }
    let empty: Vec<usize> = frame
        .columns()
        .iter()
        .enumerate()
        .filter(|(_, column)| column.null_count() == rows && !column.dtype().is_primitive_numeric())
        .map(|(position, _)| position)
        .collect();
    let mut frame = frame;
    for position in empty {
        let name = frame.columns()[position].name().clone();
        let nulls = Column::full_null(name, rows, &DataType::Float64);
        frame
            .replace_column(position, nulls)
            .map_err(|error| file_error(format!("an empty column could not be made numeric: {error}")))?;
    }
    Ok(frame)
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
    if names.len() < 2 || !distinct || !clean || header_looks_like_data(header, ',') {
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
        let frame = empty_columns_as_numbers(polars_read(text.as_bytes())?)?;
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
    let layout = || sniff_layout(text, dialect);
    if let Some(problem) = separator_problem(&records, separator, layout, dialect) {
        return Err(problem);
    }
    if let Some(problem) = preamble_problem(&records, separator, layout, dialect) {
        return Err(problem);
    }
    if dialect.header {
        if let Some(problem) = header_problem(&records[0], separator, layout, dialect) {
            return Err(problem);
        }
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
            if let Some(layout) = layout().filter(|layout| layout.separator != separator) {
                return Err(layout.other_separator(separator, dialect));
            }
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
    let missing = |field: &Field| !field.quoted && dialect.null_values.iter().any(|text| text.trim() == field.text);
    for record in data {
        for (position, field) in record.fields.iter().enumerate() {
            if position > 0 {
                plain.push(',');
            }
            // A missing value is an empty field, which polars reads as null.
            if !missing(field) {
                push_plain(&mut plain, field, convert[position]);
            }
        }
        plain.push('\n');
    }
    let frame = empty_columns_as_numbers(polars_read(plain.as_bytes())?)?;
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
        // A separator of the dialect's own choosing is sniffed too.
        let colons = CsvDialect {
            separator: ":".into(),
            ..CsvDialect::default()
        };
        let help = read("% export\nsample:T\nW1:25\nW2:26\n", &colons)
            .unwrap_err()
            .help
            .unwrap();
        assert!(
            help.contains("--separator ':' --comment-prefix '%'") && help.contains("--skip-rows 1"),
            "{help}"
        );
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

    #[test]
    fn a_column_without_values_is_numeric_nulls_in_every_path() {
        // The plain path, the scan (blanks after the separator) and a semicolon dialect.
        let semicolons = CsvDialect {
            separator: ";".into(),
            ..CsvDialect::default()
        };
        for (text, dialect) in [
            (
                "sample,thickness_m,hall_factor\nS1,,1.0\nS2,,1.0\n",
                CsvDialect::default(),
            ),
            ("sample, thickness_m, hall_factor\nS1, , 1.0\n", CsvDialect::default()),
            ("sample;thickness_m;hall_factor\nS1;;1.0\n", semicolons),
        ] {
            let (frame, _) = read(text, &dialect).unwrap();
            let thickness = frame.column("thickness_m").unwrap();
            assert_eq!(thickness.dtype(), &DataType::Float64, "{text}");
            assert_eq!(thickness.null_count(), frame.height(), "{text}");
            assert_eq!(frame.column("sample").unwrap().dtype(), &DataType::String);
        }
        // A header without rows keeps its columns as they are.
        let (frame, _) = read("sample,thickness_m\n", &CsvDialect::default()).unwrap();
        assert_eq!(frame.height(), 0);
    }

    /// The file of a lab that comments its preamble, separates by `;` and writes decimal
    /// commas: two comment lines (the first holding a comma), then the header on line 3.
    const COMMENTED_SEMICOLONS: &str =
        "# run 12, cryostat B\n# operator notes\nsample;T;V\nS1;26,85;0,2\nS1;27,15;0,25\nS2;26,9;1,5\n";

    #[test]
    fn the_help_for_a_commented_semicolon_file_gives_every_option_and_the_right_count() {
        let error = read(COMMENTED_SEMICOLONS, &CsvDialect::default()).unwrap_err();
        assert!(
            error.message.contains("begin on line 3 (`sample;T;V`)") && error.message.contains("separated by `;`"),
            "{}",
            error.message
        );
        let help = error.help.unwrap();
        for option in [
            "--separator ';' --comment-prefix '#' --decimal-comma",
            "csv.separator \";\", csv.comment_prefix \"#\", csv.decimal_comma true",
            "csv.skip_rows 2 (--skip-rows 2)",
        ] {
            assert!(help.contains(option), "{option}: {help}");
        }
        assert!(!help.contains("skip_rows 3"), "{help}");
        // The README's station: a comment line, then a `;` header over decimal commas.
        let station = "# Hall station export\nSample ID; T (C); B (G); I+; I-; V+; V-; I (mA); V (mV)\nW1; 26,85; 5000; 1; 3; 2; 4; 1,0e-1; -2,81e1\n";
        let help = read(station, &CsvDialect::default()).unwrap_err().help.unwrap();
        assert!(
            help.contains("--separator ';' --comment-prefix '#' --decimal-comma") && help.contains("--skip-rows 1"),
            "{help}"
        );
        // Following the help reads the table whole, either way.
        for dialect in [
            CsvDialect {
                separator: ";".into(),
                comment_prefix: Some("#".into()),
                decimal_comma: true,
                ..CsvDialect::default()
            },
            CsvDialect {
                separator: ";".into(),
                skip_rows: 2,
                decimal_comma: true,
                ..CsvDialect::default()
            },
        ] {
            let (frame, map) = read(COMMENTED_SEMICOLONS, &dialect).unwrap();
            assert_eq!(frame.shape(), (3, 3));
            let t: Vec<f64> = frame.column("T").unwrap().f64().unwrap().into_no_null_iter().collect();
            assert_eq!(t, vec![26.85, 27.15, 26.9]);
            assert_eq!(map.header_line, Some(3));
        }
    }

    #[test]
    fn a_header_that_reads_as_data_is_refused_with_the_right_skip() {
        // One line too many skipped: the first data row would become the header.
        for separator in [",", ";"] {
            let dialect = CsvDialect {
                separator: separator.into(),
                skip_rows: 3,
                ..CsvDialect::default()
            };
            let error = read(COMMENTED_SEMICOLONS, &dialect).unwrap_err();
            assert!(
                error
                    .message
                    .starts_with("line 4: the header, `S1;26,85;0,2`, looks like a row of data")
                    && error.message.ends_with("csv.skip_rows 3 may skip the real header"),
                "{}",
                error.message
            );
            let help = error.help.unwrap();
            assert!(help.contains("--separator ';' --skip-rows 2 --decimal-comma"), "{help}");
        }
        // Column names that are numbers: a file without a header.
        let error = read("W1,25,5000\nW2,26,5000\n", &CsvDialect::default()).unwrap_err();
        assert!(
            error.message.contains("looks like a row of data") && error.message.contains("may have no header"),
            "{}",
            error.message
        );
        assert!(error.help.unwrap().contains("csv.header false"));
        let no_header = CsvDialect {
            header: false,
            ..CsvDialect::default()
        };
        assert_eq!(read("W1,25,5000\nW2,26,5000\n", &no_header).unwrap().0.shape(), (2, 3));
        // Names with digits in them are names.
        for text in ["sample,V12,R_xx (ohm),B 9T\nW1,1,2,3\n", "run 2,T1,T2\n1,2,3\n"] {
            assert!(read(text, &CsvDialect::default()).is_ok(), "{text}");
        }
    }

    #[test]
    fn null_values_read_unquoted_data_cells_as_missing() {
        let dialect = CsvDialect {
            null_values: vec!["n/a".into(), " -- ".into()],
            ..CsvDialect::default()
        };
        let (frame, _) = read("sample,V,note\na,1.5, n/a \nb,--,\"n/a\"\nc,2.5,x\n", &dialect).unwrap();
        let voltage: Vec<Option<f64>> = frame.column("V").unwrap().f64().unwrap().iter().collect();
        assert_eq!(voltage, vec![Some(1.5), None, Some(2.5)]);
        // A quoted cell is text as written.
        let notes: Vec<Option<&str>> = frame.column("note").unwrap().str().unwrap().iter().collect();
        assert_eq!(notes, vec![None, Some("n/a"), Some("x")]);
        // The header is names, never values.
        let (frame, _) = read("n/a,V\na,1\n", &dialect).unwrap();
        assert!(frame.column("n/a").is_ok());
        let blank = CsvDialect {
            null_values: vec![" ".into()],
            ..CsvDialect::default()
        };
        let error = read("a\n1\n", &blank).unwrap_err();
        assert!(error.message.contains("csv.null_values"), "{}", error.message);
    }
}
