//! `report.samples` and `report.render`: one self-contained HTML page per sample that a lab
//! can file with the wafer — every dataset that holds the sample, its figures, tables,
//! quality flags and provenance (which readings, which analyses with which parameters,
//! which versions; an input whose name has been dropped or stored again with another table
//! since the output was computed is marked so).
//!
//! Self-contained means no external resource at all: styles inline, figures as inline SVG
//! drawn by mobilis-plot, so the page opens the same on any machine, years later.
//!
//! The page is laid out here, its results found by `report/summary.rs`, and its numbers printed
//! by `mobilis_physics::quote`, the same code that `mobilis run`, `mobilis pipeline` and the demo
//! print with (`Notation::Plain` there, `Notation::Typeset` on the page). Its tables:
//! `hall.reduce`'s key columns are fixed; other tables lead with `temperature_K`,
//! `carrier_type`, each `X` with its `X_unc` (at most twelve) and `flags`. An analysis output
//! whose figures the page draws is not tabulated (its rows are points, curves or grids); one
//! without figures is. Tables up to 60 000 cells are embedded as a `data:text/csv` download.
//!
//! On screen a figure is never drawn wider than the page nor narrower than its own width when
//! the page has room (one-panel figures sit side by side only where two fit whole), so that its
//! text, scripts included, stays at 10 px or more. Figures of two panels are drawn twice, full
//! width for the screen and with 380 x 300 px panels for paper (`print-only`), so that their
//! text prints near its size. The print style sits in its own `<style media="print"
//! id="print-style">`; the page's script applies it on screen when the address ends in
//! `#print-check` and sets `data-tables-clipped`, `data-smallest-text-px` and friends on
//! `<html>`, which the report test reads with `--dump-dom`.

mod summary;
mod text;

use crate::errors::{ServiceError, ServiceResult};
use crate::plots::filter_rows;
use crate::service::Service;
use crate::store::{Dataset, Provenance};
use mobilis_physics::units::{customary_display, format_number};
use mobilis_protocol::results::{Report, ReportSample};
use mobilis_sdk::abi;
use polars::prelude::*;
use serde_json::{json, Map, Value};
use std::fmt::Write;
use std::sync::Arc;
pub use text::SAMPLE_COLUMN;
pub(crate) use text::{escape, samples_of};

/// Rows shown of a dataset produced by an analysis (they are few: one per temperature or peak).
const ANALYSIS_ROWS_SHOWN: usize = 200;
/// Rows shown of imported data, which can be large: the full table stays in the workspace.
const IMPORTED_ROWS_SHOWN: usize = 12;
/// The largest table (rows times columns) embedded in the page as a CSV download; larger
/// ones stay in the workspace (`mobilis export`), so that a page stays a few megabytes.
const CSV_CELLS_EMBEDDED: usize = 60_000;
/// The smallest text a figure may be drawn with, in CSS pixels.
const SMALLEST_TEXT_PX: f64 = 10.0;
/// The panel size of figures of several panels on paper: two side by side span about the
/// text width of A4 and Letter (186 to 192 mm, 703 to 725 CSS pixels), so that their text
/// is drawn near its own size.
const PRINT_PANEL_WIDTH: f64 = 380.0;
const PRINT_PANEL_HEIGHT: f64 = 300.0;

/// A cell as the report shows it, numbers in the column's customary unit
/// (displayed = SI * factor + offset; the offset shifts ln n from m^-3 to cm^-3).
fn cell_text(value: AnyValue, (factor, offset): (f64, f64)) -> String {
    match value {
        AnyValue::Null => String::new(),
        AnyValue::Boolean(flag) => if flag { "yes" } else { "no" }.into(),
        AnyValue::String(text) => text.to_owned(),
        AnyValue::StringOwned(text) => text.to_string(),
        other => match other.extract::<f64>() {
            Some(number) if matches!(other, AnyValue::Float32(_) | AnyValue::Float64(_)) => {
                if number.is_finite() {
                    format_number(number * factor + offset)
                } else {
                    String::new()
                }
            }
            Some(number) => format!("{number}"),
            None => other.to_string(),
        },
    }
}

/// An HTML table of the first `limit` rows of `columns` (all but the sample column when
/// empty), in customary units.
fn table_html(frame: &DataFrame, columns: &[String], limit: usize, class: &str) -> String {
    let columns: Vec<&Column> = if columns.is_empty() {
        frame
            .columns()
            .iter()
            .filter(|c| c.name().as_str() != SAMPLE_COLUMN)
            .collect()
    } else {
        columns.iter().filter_map(|name| frame.column(name).ok()).collect()
    };
    let displays: Vec<(String, (f64, f64))> = columns
        .iter()
        .map(|c| match customary_display(c.name()) {
            Some(display) => (display.label, (display.factor, display.offset)),
            None => (c.name().to_string(), (1.0, 0.0)),
        })
        .collect();
    let shown = frame.height().min(limit);
    if shown <= TRANSPOSED_MAX_ROWS && columns.len() > TRANSPOSED_MIN_COLUMNS {
        return transposed_table_html(&columns, &displays, shown, class);
    }
    let mut html = format!("<div class=\"table-wrap\"><table class=\"{class}\"><thead><tr>");
    for (label, _) in &displays {
        // Long stored names may break after their underscores.
        let _ = write!(html, "<th>{}</th>", escape(label).replace('_', "_<wbr>"));
    }
    html.push_str("</tr></thead><tbody>");
    for row in 0..frame.height().min(limit) {
        html.push_str("<tr>");
        for (column, (_, conversion)) in columns.iter().zip(&displays) {
            let value = column.get(row).unwrap_or(AnyValue::Null);
            // Text may wrap anywhere on paper; numbers stay whole.
            let class = if column.dtype() == &DataType::String {
                " class=\"text\""
            } else {
                ""
            };
            let _ = write!(html, "<td{class}>{}</td>", escape(&cell_text(value, *conversion)));
        }
        html.push_str("</tr>");
    }
    html.push_str("</tbody></table></div>");
    if frame.height() > limit {
        let _ = write!(
            html,
            "<p class=\"note\">First {limit} of {} rows; the whole table is in the CSV download and the workspace (mobilis export).</p>",
            frame.height()
        );
    }
    html
}

/// A table of at most this many rows and more than `TRANSPOSED_MIN_COLUMNS` columns (a
/// summary: one fit, one row per carrier) is shown one quantity per row. Its width then
/// grows with its rows, not its columns, and fits paper whatever the font: a number such as
/// `3.000e15` has no place to break, so a wide row of them cannot wrap.
const TRANSPOSED_MAX_ROWS: usize = 4;
const TRANSPOSED_MIN_COLUMNS: usize = 6;

/// A few rows of many columns, one quantity per table row and one data row per column.
fn transposed_table_html(columns: &[&Column], displays: &[(String, (f64, f64))], rows: usize, class: &str) -> String {
    let mut html =
        format!("<div class=\"table-wrap\"><table class=\"{class} transposed\"><thead><tr><th>Quantity</th>");
    for row in 0..rows {
        if rows == 1 {
            html.push_str("<th>Value</th>");
        } else {
            let _ = write!(html, "<th>Row {}</th>", row + 1);
        }
    }
    html.push_str("</tr></thead><tbody>");
    for (column, (label, conversion)) in columns.iter().zip(displays) {
        let _ = write!(
            html,
            "<tr><th scope=\"row\">{}</th>",
            escape(label).replace('_', "_<wbr>")
        );
        let class = if column.dtype() == &DataType::String {
            " class=\"text\""
        } else {
            ""
        };
        for row in 0..rows {
            let value = column.get(row).unwrap_or(AnyValue::Null);
            let _ = write!(html, "<td{class}>{}</td>", escape(&cell_text(value, *conversion)));
        }
        html.push_str("</tr>");
    }
    html.push_str("</tbody></table></div>");
    html
}

/// The columns a person reads first: for `hall.reduce` temperature, carrier type, density,
/// mobility, resistivity and sheet resistance with their uncertainties, and the flags; for
/// other tables the temperature, the carrier type and each quantity with an `_unc` column,
/// at most twelve.
fn key_columns(analysis: Option<&str>, frame: &DataFrame) -> Vec<String> {
    let has = |name: &str| frame.column(name).is_ok();
    let mut key: Vec<String> = Vec::new();
    if analysis == Some("hall.reduce") {
        for name in [
            "temperature_K",
            "carrier_type",
            "density_m3",
            "density_m3_unc",
            "sheet_density_m2",
            "sheet_density_m2_unc",
            "hall_mobility_m2_per_Vs",
            "hall_mobility_m2_per_Vs_unc",
            "resistivity_ohm_m",
            "resistivity_ohm_m_unc",
            "sheet_resistance_ohm_sq",
            "sheet_resistance_ohm_sq_unc",
            "flags",
        ] {
            // A bulk sample's sheet density repeats its density; a film without a thickness has only the sheet one.
            if name.starts_with("sheet_density") && has("density_m3") {
                continue;
            }
            if has(name) {
                key.push(name.to_owned());
            }
        }
        return key;
    }
    for name in ["temperature_K", "carrier_type"] {
        if has(name) {
            key.push(name.to_owned());
        }
    }
    for column in frame.columns() {
        let name = column.name().as_str();
        let uncertainty = format!("{name}_unc");
        if key.len() + 2 <= 12 && name != "temperature_K" && !name.contains("_unc") && has(&uncertainty) {
            key.push(name.to_owned());
            key.push(uncertainty);
        }
    }
    for name in ["flags", "freeze_out_consistent", "quality_ok"] {
        if has(name) && key.len() < 13 {
            key.push(name.to_owned());
        }
    }
    key
}

/// Every column but the sample, the key ones first.
fn ordered_columns(frame: &DataFrame, key: &[String]) -> Vec<String> {
    let mut columns = key.to_vec();
    for column in frame.columns() {
        let name = column.name().to_string();
        if name != SAMPLE_COLUMN && !columns.contains(&name) {
            columns.push(name);
        }
    }
    columns
}

/// Standard Base64 (RFC 4648, section 4) of `bytes`.
fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [chunk[0], *chunk.get(1).unwrap_or(&0), *chunk.get(2).unwrap_or(&0)];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for (i, shift) in [18, 12, 6, 0].into_iter().enumerate() {
            if i <= chunk.len() {
                out.push(ALPHABET[((n >> shift) & 63) as usize] as char);
            } else {
                out.push('=');
            }
        }
    }
    out
}

/// The rows as CSV (RFC 4180): stored column names, SI values, numbers in full precision.
fn csv_text(frame: &DataFrame) -> String {
    let quote = |text: &str| {
        if text.contains([',', '"', '\n', '\r']) {
            format!("\"{}\"", text.replace('"', "\"\""))
        } else {
            text.to_owned()
        }
    };
    let mut csv = frame
        .columns()
        .iter()
        .map(|c| quote(c.name()))
        .collect::<Vec<_>>()
        .join(",");
    csv.push_str("\r\n");
    for row in 0..frame.height() {
        let cells: Vec<String> = frame
            .columns()
            .iter()
            .map(|column| match column.get(row).unwrap_or(AnyValue::Null) {
                AnyValue::Null => String::new(),
                AnyValue::Boolean(flag) => flag.to_string(),
                AnyValue::String(text) => quote(text),
                AnyValue::StringOwned(text) => quote(&text),
                other => match other.extract::<f64>() {
                    // Shortest text that reads back as the same double; exponent form far from 1.
                    Some(number) if number.is_finite() => {
                        let magnitude = number.abs();
                        if magnitude != 0.0 && !(1e-4..1e15).contains(&magnitude) {
                            format!("{number:e}")
                        } else {
                            format!("{number}")
                        }
                    }
                    Some(_) => String::new(),
                    None => quote(&other.to_string()),
                },
            })
            .collect();
        csv.push_str(&cells.join(","));
        csv.push_str("\r\n");
    }
    csv
}

/// A link that downloads the rows as CSV, or where they are when too large to embed.
fn csv_html(frame: &DataFrame, dataset: &str, sample: &str) -> String {
    let cells = frame.height() * frame.width();
    if cells > CSV_CELLS_EMBEDDED {
        return format!(
            "<p class=\"note csv\">All {} rows: <code>mobilis export {}</code> (too large to embed in this page).</p>",
            frame.height(),
            escape(dataset)
        );
    }
    format!(
        "<p class=\"note csv\"><a class=\"csv\" download=\"{}-{}.csv\" href=\"data:text/csv;charset=utf-8;base64,{}\">Download all {} rows as CSV</a> (SI units, stored column names).</p>",
        escape(dataset),
        escape(sample),
        base64(csv_text(frame).as_bytes()),
        frame.height()
    )
}

/// The drawn width of a figure: its own width, or wider where its smallest text (the
/// `font-size` attributes) would be drawn under [`SMALLEST_TEXT_PX`].
fn figure_width(svg: &str) -> (f64, f64) {
    let attribute = |name: &str| -> Vec<f64> {
        svg.match_indices(&format!("{name}=\""))
            .filter_map(|(at, matched)| {
                let rest = &svg[at + matched.len()..];
                rest[..rest.find('"')?].parse::<f64>().ok()
            })
            .collect()
    };
    let width = attribute("width").first().copied().unwrap_or(640.0);
    let smallest = attribute("font-size").into_iter().fold(f64::INFINITY, f64::min);
    let scale = if smallest.is_finite() && smallest > 0.0 {
        (SMALLEST_TEXT_PX / smallest).max(1.0)
    } else {
        1.0
    };
    (width, width * scale)
}

/// The quality-flag callout of a table with `flags` and `quality_ok` columns (hall.reduce).
fn flags_html(frame: &DataFrame) -> Option<String> {
    let flags = frame.column("flags").ok()?.str().ok()?.clone();
    let mut counts: std::collections::BTreeMap<String, usize> = Default::default();
    let mut flagged = 0;
    for cell in flags.iter().flatten() {
        let raised: Vec<&str> = cell.split(',').map(str::trim).filter(|f| !f.is_empty()).collect();
        if !raised.is_empty() {
            flagged += 1;
        }
        for flag in raised {
            *counts.entry(flag.to_owned()).or_default() += 1;
        }
    }
    if flagged == 0 {
        return Some(format!(
            "<p class=\"flags ok\">Quality flags: none raised on {} rows.</p>",
            frame.height()
        ));
    }
    let list: Vec<String> = counts
        .iter()
        .map(|(flag, count)| format!("<code>{}</code> on {count}", escape(flag)))
        .collect();
    Some(format!(
        "<p class=\"flags raised\">Quality flags: {flagged} of {} rows flagged — {}. Thresholds and meanings: the flags column and the threshold parameters in mobilis describe hall.reduce.</p>",
        frame.height(),
        list.join(", ")
    ))
}

/// A dataset's provenance as a sentence. `stored_version(name)` is the version stored under
/// `name` now (`None` when no dataset has the name): an input whose name now holds another
/// table than the one the output read is marked, since its link leads to that other table.
fn provenance_html(provenance: &Provenance, stored_version: impl Fn(&str) -> Option<Option<String>>) -> String {
    match provenance {
        Provenance::File {
            path,
            format,
            units,
            rename,
            csv,
            sha256,
            size_bytes,
            modified,
        } => {
            let mut text = format!("Imported from <code>{}</code> ({}", escape(path), escape(format));
            if let Some(size) = size_bytes {
                let _ = write!(text, ", {size} bytes");
            }
            if let Some(modified) = modified {
                let _ = write!(text, ", modified {}", escape(modified));
            }
            if let Some(sha256) = sha256 {
                let _ = write!(text, ", SHA-256 <code>{}</code>", escape(sha256));
            }
            text.push_str(").");
            if let Some(csv) = csv {
                let mut dialect = vec![format!("separator <code>{}</code>", escape(&csv.separator))];
                if csv.decimal_comma {
                    dialect.push("decimal comma".into());
                }
                if let Some(prefix) = &csv.comment_prefix {
                    dialect.push(format!("comments <code>{}</code>", escape(prefix)));
                }
                if csv.skip_rows > 0 {
                    dialect.push(format!("{} lines skipped", csv.skip_rows));
                }
                if !csv.header {
                    dialect.push("no header".into());
                }
                let _ = write!(text, " Read as CSV with {}.", dialect.join(", "));
            }
            if !rename.is_empty() {
                let renamed: Vec<String> = rename
                    .iter()
                    .map(|(source, target)| format!("{} to {}", escape(source), escape(target)))
                    .collect();
                let _ = write!(text, " Renamed: {}.", renamed.join(", "));
            }
            if !units.is_empty() {
                let converted: Vec<String> = units
                    .iter()
                    .map(|(column, unit)| format!("{} from {}", escape(column), escape(unit)))
                    .collect();
                let _ = write!(text, " Converted into SI: {}.", converted.join(", "));
            }
            text
        }
        Provenance::Inline { units } => {
            let mut text = String::from("Sent inline by a client.");
            if !units.is_empty() {
                let _ = write!(text, " Converted into SI: {}.", escape(&format!("{units:?}")));
            }
            text
        }
        Provenance::Analysis {
            analysis,
            plugin,
            plugin_version,
            params,
            inputs,
            input_versions,
            group_by,
            group_tolerance,
            summary,
            ..
        } => {
            let inputs: Vec<String> = inputs
                .iter()
                .map(|(role, dataset)| {
                    let since = match (input_versions.get(role), stored_version(dataset)) {
                        (Some(_), None) => " (dropped since)",
                        (Some(read), Some(now)) if now.as_deref() != Some(read.as_str()) => {
                            " (stored again since, with another table)"
                        }
                        _ => "",
                    };
                    format!(
                        "{} = <a href=\"#dataset-{}\">{}</a>{since}",
                        escape(role),
                        escape(dataset),
                        escape(dataset)
                    )
                })
                .collect();
            let mut text = format!(
                "{} of <code>{}</code> (plugin {} {}), inputs {}",
                if *summary { "Summary" } else { "Output" },
                escape(analysis),
                escape(plugin),
                escape(plugin_version),
                inputs.join(", ")
            );
            if !group_by.is_empty() {
                let columns: Vec<String> = group_by
                    .iter()
                    .map(|column| match group_tolerance.get(column) {
                        Some(tolerance) => format!("{column} (sorted values up to {tolerance} apart in one group)"),
                        None => column.clone(),
                    })
                    .collect();
                let _ = write!(text, ", run per {}", escape(&columns.join(", ")));
            }
            let params = serde_json::to_string(params).unwrap_or_default();
            let _ = write!(text, ". Parameters: <code>{}</code>.", escape(&params));
            text
        }
    }
}

const STYLE: &str = r#"
:root { --ink: #1d2430; --muted: #5b6577; --rule: #d5dae3; --accent: #0d6e6e; --warn: #a4461a; --paper: #fbfbf8; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--paper); color: var(--ink); font: 15px/1.45 "Segoe UI", "Helvetica Neue", Arial, sans-serif; }
header { padding: 24px 20px 16px; border-bottom: 3px solid var(--accent); background: #fff; }
header h1 { margin: 0 0 4px; font-size: 26px; letter-spacing: 0.01em; }
header .meta { color: var(--muted); font-size: 13px; }
main { padding: 8px 20px 40px; max-width: 1280px; }
section.results { margin-top: 18px; }
section.results h2, section.dataset h2 { font-size: 19px; margin: 0 0 6px; color: var(--accent); }
.result { margin: 14px 0 18px; }
.result h3 { font-size: 15px; margin: 0 0 4px; }
.result h3 .from { font-weight: normal; font-size: 13px; color: var(--muted); }
.quality { font-size: 13px; color: var(--muted); margin: 4px 0; }
section.dataset { margin-top: 30px; padding-top: 10px; border-top: 1px solid var(--rule); }
.provenance { color: var(--muted); font-size: 13px; margin: 0 0 10px; overflow-wrap: anywhere; }
.figures { display: flex; flex-wrap: wrap; gap: 12px; margin: 12px 0; }
figure.plot { margin: 0; background: #fff; border: 1px solid var(--rule); border-radius: 4px; padding: 6px; flex: 0 1 auto; max-width: 100%; }
figure.plot.wide { flex: 1 1 100%; max-width: none; }
figure.plot.print-only { display: none; }
figure.plot svg { display: block; max-width: 100%; height: auto; }
figure.plot.wide svg { width: 100%; }
figure.plot figcaption { font-size: 12px; color: var(--muted); padding: 2px 4px; }
.table-wrap { overflow-x: auto; border: 1px solid var(--rule); background: #fff; max-width: 100%; }
table { border-collapse: collapse; font-size: 12px; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 8px; border-bottom: 1px solid #eceff4; text-align: right; white-space: nowrap; }
th { white-space: normal; min-width: 4em; }
th { background: #f0f3f6; font-weight: 600; }
table.key { background: #fff; border: 1px solid var(--rule); font-size: 13px; }
table.key td, table.key th { text-align: left; }
table.transposed th[scope=row] { background: #f7f9fb; font-weight: normal; white-space: normal; }
table.quantities th { background: none; font-weight: normal; }
table.quantities td { font-weight: 600; }
details { margin: 8px 0; }
details > summary { cursor: pointer; color: var(--accent); font-size: 13px; }
.note { color: var(--muted); font-size: 12px; }
.flags { padding: 4px 10px; margin: 4px 0; border-left: 4px solid; font-size: 13px; }
.flags.ok { border-color: var(--accent); background: #eef6f5; }
.flags.raised { border-color: var(--warn); background: #fbf0ea; }
.caution { font-size: 12px; color: var(--muted); border-top: 1px solid var(--rule); margin-top: 36px; padding-top: 10px; }
code { font-size: 12px; background: #eef0f4; padding: 0 3px; border-radius: 2px; word-break: break-word; }
"#;

/// Print (A4 and Letter alike): nothing wider than the paper. Tables wrap their cells and
/// shrink their type, figures stand one below the other (two single panels to a page) and
/// never split across pages; disclosures and download links stay off paper. Kept in a style
/// element of its own (`media="print"`) so that a check can apply it on screen.
const PRINT_STYLE: &str = r#"
@page { margin: 12mm; }
body { background: #fff; font-size: 11px; }
header { padding: 0 0 8px; border-bottom-width: 2px; }
header h1 { font-size: 20px; }
main { padding: 0; max-width: none; }
.table-wrap { overflow: visible; border: none; }
table { width: 100%; font-size: 8.5px; }
table.key { font-size: 10px; }
th, td { white-space: normal; padding: 2px 3px; }
td.text { overflow-wrap: anywhere; }
tr, .result, figure.plot, .flags { break-inside: avoid; }
h2, h3 { break-after: avoid; }
thead { display: table-header-group; }
.figures { display: block; }
figure.plot { width: 88%; max-width: 100% !important; margin: 0 auto 8px; border: none; padding: 0; }
figure.plot.wide { width: 100%; }
figure.plot.print-only { display: block; }
figure.plot.screen-only { display: none; }
table.key { width: auto; max-width: 100%; }
p.csv, a.csv, details { display: none; }
code { font-size: 10px; }
"#;

/// Counts the figures the browser laid out and the smallest text drawn in them, for
/// automated checks of a filed report. With `#print-check` in the address it first applies
/// the print style; then it tells whether any table shown (not in a closed disclosure) is
/// wider than the space it has.
const LAYOUT_CHECK: &str = r#"
window.addEventListener("load", function () {
  var root = document.documentElement;
  if (location.hash.indexOf("print-check") >= 0) {
    document.getElementById("print-style").media = "all";
  }
  var drawn = 0, figures = Array.prototype.filter.call(document.querySelectorAll("figure.plot svg"),
    function (svg) { return getComputedStyle(svg.parentElement).display !== "none"; });
  var smallestText = Infinity, smallestPart = Infinity;
  figures.forEach(function (svg) {
    var box = svg.getBoundingClientRect(); if (box.width > 0 && box.height > 0) drawn += 1;
    svg.querySelectorAll("text, tspan").forEach(function (text) {
      if (!text.textContent.trim()) return;
      var m = text.getScreenCTM(); if (!m) return;
      var size = parseFloat(getComputedStyle(text).fontSize) * Math.hypot(m.a, m.b);
      if (text.tagName === "text") smallestText = Math.min(smallestText, size);
      else smallestPart = Math.min(smallestPart, size);
    });
  });
  root.setAttribute("data-figures", String(figures.length));
  root.setAttribute("data-figures-drawn", String(drawn));
  root.setAttribute("data-smallest-text-px", smallestText === Infinity ? "none" : smallestText.toFixed(2));
  root.setAttribute("data-smallest-raised-text-px", smallestPart === Infinity ? "none" : smallestPart.toFixed(2));
  var tables = 0, clipped = [];
  document.querySelectorAll("table").forEach(function (table) {
    if (!table.offsetParent || table.closest("details:not([open])")) return;
    tables += 1;
    var container = table.parentElement;
    var overflow = table.scrollWidth > container.clientWidth + 1 ||
      table.getBoundingClientRect().right > root.clientWidth + 1;
    if (overflow) clipped.push((table.closest("section") || {}).id || "table");
  });
  root.setAttribute("data-tables", String(tables));
  root.setAttribute("data-tables-clipped", clipped.join(" "));
  root.setAttribute("data-page-width", String(root.clientWidth));
  root.setAttribute("data-content-width", String(root.scrollWidth));
});
"#;

/// How many analyses lie between a dataset and the imported data it derives from.
fn chain_depth(
    name: &str,
    all: &[Arc<Dataset>],
    depths: &mut std::collections::HashMap<String, usize>,
    guard: usize,
) -> usize {
    if let Some(depth) = depths.get(name) {
        return *depth;
    }
    let depth = match all
        .iter()
        .find(|d| d.manifest.name == name)
        .map(|d| &d.manifest.provenance)
    {
        // An overwritten input could in principle point back at its reader: stop at any depth
        // no real chain reaches.
        Some(Provenance::Analysis { inputs, .. }) if guard < 64 => {
            1 + inputs
                .values()
                .map(|input| chain_depth(input, all, depths, guard + 1))
                .max()
                .unwrap_or(0)
        }
        _ => 0,
    };
    depths.insert(name.to_owned(), depth);
    depth
}

/// The samples a dataset's report pages are: its own (`samples_of`) or, for an analysis
/// output that names none (an ungrouped fit of one sample's series, stored without a
/// `sample` column), the one sample all its inputs hold, followed back through the
/// analyses that made them. An output of inputs with several samples names none.
fn attributed_samples(
    dataset: &Dataset,
    all: &[Arc<Dataset>],
    memo: &mut std::collections::HashMap<String, std::collections::BTreeSet<String>>,
    guard: usize,
) -> std::collections::BTreeSet<String> {
    if let Some(samples) = memo.get(&dataset.manifest.name) {
        return samples.clone();
    }
    let own = samples_of(dataset);
    let samples = match &dataset.manifest.provenance {
        Provenance::Analysis { inputs, .. } if own.is_empty() && guard < 64 => {
            let mut from_inputs = std::collections::BTreeSet::new();
            for input in inputs.values() {
                if let Some(stored) = all.iter().find(|d| &d.manifest.name == input) {
                    from_inputs.extend(attributed_samples(stored, all, memo, guard + 1));
                }
            }
            if from_inputs.len() == 1 {
                from_inputs
            } else {
                Default::default()
            }
        }
        _ => own,
    };
    memo.insert(dataset.manifest.name.clone(), samples.clone());
    samples
}

impl Service {
    /// Every sample named in a `sample` column (or, for an output without one, the sample
    /// of its inputs: [`attributed_samples`]), with the datasets that hold it.
    pub fn report_samples(&self) -> Vec<ReportSample> {
        let mut samples: std::collections::BTreeMap<String, Vec<String>> = Default::default();
        let all = self.store.list();
        let mut memo = Default::default();
        for dataset in &all {
            for sample in attributed_samples(dataset, &all, &mut memo, 0) {
                samples.entry(sample).or_default().push(dataset.manifest.name.clone());
            }
        }
        samples
            .into_iter()
            .map(|(sample, datasets)| ReportSample { sample, datasets })
            .collect()
    }

    /// The HTML page of one sample.
    pub fn report_render(&self, sample: &str) -> ServiceResult<Report> {
        let all = self.store.list();
        let mut memo = Default::default();
        let mut datasets: Vec<Arc<Dataset>> = all
            .iter()
            .filter(|d| attributed_samples(d, &all, &mut memo, 0).contains(sample))
            .cloned()
            .collect();
        if datasets.is_empty() {
            let known: Vec<String> = self.report_samples().into_iter().map(|s| s.sample).collect();
            return Err(
                ServiceError::invalid_params(format!("no dataset has rows of sample `{sample}`")).with_help(
                    if known.is_empty() {
                        "no stored dataset has a `sample` column yet; import data with one".to_owned()
                    } else {
                        format!("samples with data: {}", known.join(", "))
                    },
                ),
            );
        }
        // Imports first, then each analysis after the datasets it read: the page reads as
        // the work went (creation times have whole seconds and cannot order a fast pipeline).
        let mut depths: std::collections::HashMap<String, usize> = Default::default();
        for dataset in &datasets {
            chain_depth(&dataset.manifest.name, &all, &mut depths, 0);
        }
        datasets.sort_by(|a, b| {
            let key = |d: &Dataset| {
                (
                    depths.get(&d.manifest.name).copied().unwrap_or(0),
                    d.manifest.created.clone(),
                )
            };
            key(a).cmp(&key(b)).then_with(|| a.manifest.name.cmp(&b.manifest.name))
        });
        let filter: Map<String, Value> = [(SAMPLE_COLUMN.to_owned(), json!(sample))].into_iter().collect();
        let mut frames = Vec::with_capacity(datasets.len());
        for dataset in &datasets {
            // A dataset without a `sample` column is here because its run summary or its
            // inputs name the sample (see `attributed_samples`): all its rows are the sample's.
            let rows = if dataset.frame.column(SAMPLE_COLUMN).is_ok() {
                filter_rows(&dataset.frame, &filter)?
            } else {
                dataset.frame.clone()
            };
            frames.push((dataset.as_ref(), rows));
        }
        let results = summary::blocks(sample, &frames);
        let mut body = summary::html(&results);
        let mut figures_drawn = 0usize;
        let mut contents = Vec::new();
        // The figures come from the declarations of the analyses that made the datasets.
        let catalog = self.figure_catalog();
        for (dataset, frame) in &frames {
            let name = &dataset.manifest.name;
            let _ = write!(
                body,
                "<section class=\"dataset\" id=\"dataset-{}\"><h2>{}</h2><p class=\"provenance\">{} {} rows of this sample (of {} in the dataset); stored {}.</p>",
                escape(name),
                escape(name),
                provenance_html(&dataset.manifest.provenance, |input| {
                    self.store.get(input).ok().map(|stored| stored.manifest.version.clone())
                }),
                frame.height(),
                dataset.frame.height(),
                escape(&dataset.manifest.created)
            );
            if let Some(flags) = flags_html(frame) {
                body.push_str(&flags);
            }
            let analysis = match &dataset.manifest.provenance {
                Provenance::Analysis {
                    analysis,
                    summary: false,
                    ..
                } => Some(analysis.as_str()),
                _ => None,
            };
            let kinds: Vec<String> = match analysis {
                Some(analysis) => catalog
                    .kinds_for(Some(analysis))
                    .into_iter()
                    .filter(|k| k != mobilis_plot::COLUMNS)
                    .collect(),
                None => Vec::new(),
            };
            let mut drawn = Vec::new();
            let mut not_drawn = Vec::new();
            for kind in &kinds {
                let options = mobilis_plot::PlotOptions {
                    kind: Some(kind.clone()),
                    analysis: analysis.map(str::to_owned),
                    ..Default::default()
                };
                match mobilis_plot::build(frame, name, &options, &catalog) {
                    Ok(figure) => {
                        let svg = figure.to_svg();
                        let (width, drawn_width) = figure_width(&svg);
                        // Two panels side by side take the full width; single panels share a row
                        // where two fit at a size their text stays legible at.
                        let (class, style) = if width > 800.0 {
                            // Paper is narrower than a screen: smaller panels, drawn for print
                            // only, keep the text as large as on screen.
                            let print = mobilis_plot::PlotOptions {
                                width: Some(PRINT_PANEL_WIDTH),
                                height: Some(PRINT_PANEL_HEIGHT),
                                ..options.clone()
                            };
                            if let Ok(small) = mobilis_plot::build(frame, name, &print, &catalog) {
                                drawn.push(format!(
                                    "<figure class=\"plot wide print-only\" data-kind=\"{}\">{}<figcaption>figure kind {} (plot.render)</figcaption></figure>",
                                    escape(kind),
                                    small.to_svg(),
                                    escape(kind)
                                ));
                            }
                            ("plot wide screen-only", String::new())
                        } else {
                            (
                                "plot",
                                format!(
                                    " style=\"flex-basis: {:.0}px; max-width: {:.0}px\"",
                                    width * 0.92,
                                    drawn_width.max(width)
                                ),
                            )
                        };
                        drawn.push(format!(
                            "<figure class=\"{class}\" data-kind=\"{}\"{style}>{svg}<figcaption>figure kind {} (plot.render)</figcaption></figure>",
                            escape(kind),
                            escape(kind)
                        ))
                    }
                    Err(error) => not_drawn.push(format!("{kind}: {error}")),
                }
            }
            if !drawn.is_empty() {
                figures_drawn += drawn.iter().filter(|f| !f.contains("print-only")).count();
                let _ = write!(body, "<div class=\"figures\">{}</div>", drawn.join(""));
            }
            for reason in &not_drawn {
                let _ = write!(body, "<p class=\"note\">Not drawn: {}</p>", escape(reason));
            }
            let produced = matches!(dataset.manifest.provenance, Provenance::Analysis { .. });
            // hall.reduce's rows are its results; other analyses' rows (points, fitted curves,
            // spectrum grids) are what their figures draw.
            let rows_are_results = analysis == Some("hall.reduce") || (produced && drawn.is_empty());
            if rows_are_results {
                let key = key_columns(analysis, frame);
                body.push_str(&table_html(frame, &key, ANALYSIS_ROWS_SHOWN, "key"));
                let all = ordered_columns(frame, &key);
                let _ = write!(
                    body,
                    "<details><summary>All {} columns, the key ones first</summary>{}</details>",
                    all.len(),
                    table_html(frame, &all, ANALYSIS_ROWS_SHOWN, "full")
                );
            } else if produced {
                let _ = write!(
                    body,
                    "<p class=\"note\">Its {} rows of this sample (points, fitted curves, grids) are drawn in the figures above, not tabulated.</p>",
                    frame.height()
                );
            } else {
                let _ = write!(
                    body,
                    "<details><summary>Imported rows of this sample ({})</summary>{}</details>",
                    frame.height(),
                    table_html(frame, &[], IMPORTED_ROWS_SHOWN, "full")
                );
            }
            body.push_str(&csv_html(frame, name, sample));
            body.push_str("</section>");
            contents.push(name.clone());
        }

        let plugins: Vec<String> = self
            .host
            .plugins
            .iter()
            .map(|p| format!("{} {}", escape(&p.name), escape(&p.version)))
            .collect();
        let generated = crate::store::utc_timestamp(std::time::SystemTime::now());
        let toc: Vec<String> = contents
            .iter()
            .map(|n| format!("<a href=\"#dataset-{}\">{}</a>", escape(n), escape(n)))
            .collect();
        let html = format!(
            "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
<meta name=\"generator\" content=\"mobilisd {version}\"><title>Sample {sample_escaped} — transport report</title><style>{STYLE}</style>\
<style media=\"print\" id=\"print-style\">{PRINT_STYLE}</style><script>{LAYOUT_CHECK}</script></head><body><header><h1>Sample {sample_escaped}</h1>\
<div class=\"meta\">Transport report generated {generated} by mobilisd {version} (plugin ABI {major}.{minor}); plugins: {plugins}.<br>\
Contents: <a href=\"#results\">Results</a> · {toc}</div></header><main>{body}\
<p class=\"caution\">Values are in the customary units of the trade (densities per cm³ or cm², mobilities in cm²/(V s), \
resistivities in Ω cm); the workspace keeps SI. These analyses support, and do not replace, the laboratory's own \
procedures and review.</p></main></body></html>\n",
            version = env!("CARGO_PKG_VERSION"),
            sample_escaped = escape(sample),
            major = abi::ABI_MAJOR,
            minor = abi::ABI_MINOR,
            plugins = plugins.join(", "),
            toc = toc.join(" · "),
        );
        Ok(Report {
            sample: sample.to_owned(),
            datasets: contents,
            figures: figures_drawn,
            html,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_input_stored_again_since_the_output_was_made_is_marked() {
        let provenance = Provenance::Analysis {
            analysis: "carriers.arrhenius".into(),
            plugin: "carriers".into(),
            plugin_version: "0.1.0".into(),
            params: serde_json::json!({}),
            inputs: [("hall".to_owned(), "w-hall".to_owned())].into_iter().collect(),
            input_versions: [("hall".to_owned(), "read".to_owned())].into_iter().collect(),
            group_by: Vec::new(),
            group_tolerance: Default::default(),
            summary: false,
            run_summary: Value::Null,
            warnings: Vec::new(),
        };
        let with_stored =
            |version: Option<Option<&str>>| provenance_html(&provenance, |_| version.map(|v| v.map(str::to_owned)));
        assert!(!with_stored(Some(Some("read"))).contains("since"));
        assert!(with_stored(Some(Some("later"))).contains("w-hall</a> (stored again since"));
        assert!(with_stored(Some(None)).contains("stored again since"));
        assert!(with_stored(None).contains("w-hall</a> (dropped since)"));
    }

    #[test]
    fn text_is_escaped_for_html() {
        assert_eq!(
            escape("<a href=\"x\">R&D</a>'"),
            "&lt;a href=&quot;x&quot;&gt;R&amp;D&lt;/a&gt;&#39;"
        );
    }

    #[test]
    fn tables_show_customary_units_and_leave_out_the_sample() {
        let frame = df!(
            "sample" => ["W1", "W1"],
            "temperature_K" => [77.0, 300.0],
            "density_m3" => [3.0e21, f64::NAN],
        )
        .unwrap();
        let html = table_html(&frame, &[], 1, "full");
        assert!(html.contains("<th>density_<wbr>cm3</th>"), "{html}");
        assert!(html.contains("<td>3.000e15</td>"), "{html}");
        assert!(!html.contains("W1") && !html.contains(">sample<"), "{html}");
        assert!(html.contains("First 1 of 2 rows"), "{html}");
    }

    #[test]
    fn a_summary_of_many_columns_is_shown_one_quantity_per_row() {
        let names: Vec<String> = (0..9).map(|i| format!("quantity_{i}")).collect();
        let columns: Vec<Column> = names
            .iter()
            .enumerate()
            .map(|(i, name)| Column::new(name.as_str().into(), [1.5e15 * (i + 1) as f64]))
            .collect();
        let frame = DataFrame::new(1, columns).unwrap();
        let html = table_html(&frame, &[], 200, "key");
        assert!(html.contains("transposed"), "{html}");
        // One header row and one row per quantity, each with one value.
        assert_eq!(html.matches("<tr>").count(), 1 + names.len(), "{html}");
        assert!(
            html.contains("<th scope=\"row\">quantity_<wbr>8</th><td>1.350e16</td>"),
            "{html}"
        );
        // A long table keeps its columns.
        let long = df!("a" => [1.0; 5], "b" => [2.0; 5], "c" => [3.0; 5], "d" => [4.0; 5], "e" => [5.0; 5], "f" => [6.0; 5], "g" => [7.0; 5]).unwrap();
        assert!(!table_html(&long, &[], 200, "key").contains("transposed"));
    }

    #[test]
    fn key_columns_come_first_and_the_csv_keeps_si_and_stored_names() {
        let frame = df!(
            "sample" => ["W1", "W1"],
            "geometry" => ["vdp", "vdp"],
            "temperature_K" => [77.0, 300.0],
            "resistivity_ohm_m" => [0.01, 0.02],
            "hall_mobility_m2_per_Vs" => [0.5, 0.1],
            "hall_mobility_m2_per_Vs_unc" => [0.005, 0.001],
            "carrier_type" => ["n", "n"],
            "density_m3" => [3.0e21, 3.1e21],
            "density_m3_unc" => [3.0e19, 3.1e19],
            "flags" => ["", "note, \"quoted\""],
        )
        .unwrap();
        let key = key_columns(Some("hall.reduce"), &frame);
        assert_eq!(
            key,
            [
                "temperature_K",
                "carrier_type",
                "density_m3",
                "density_m3_unc",
                "hall_mobility_m2_per_Vs",
                "hall_mobility_m2_per_Vs_unc",
                "resistivity_ohm_m",
                "flags"
            ]
        );
        let all = ordered_columns(&frame, &key);
        assert_eq!(all[..key.len()], key[..]);
        assert_eq!(all.last().map(String::as_str), Some("geometry"));
        assert!(!all.iter().any(|c| c == "sample"));
        // Other tables: temperature, carrier type, then each quantity with its uncertainty.
        let generic = key_columns(Some("carriers.purity"), &frame);
        assert_eq!(
            generic[..4],
            [
                "temperature_K",
                "carrier_type",
                "hall_mobility_m2_per_Vs",
                "hall_mobility_m2_per_Vs_unc"
            ]
        );
        let csv = csv_text(&frame);
        let mut lines = csv.lines();
        assert_eq!(
            lines.next(),
            Some("sample,geometry,temperature_K,resistivity_ohm_m,hall_mobility_m2_per_Vs,hall_mobility_m2_per_Vs_unc,carrier_type,density_m3,density_m3_unc,flags")
        );
        assert_eq!(
            lines.nth(1),
            Some("W1,vdp,300,0.02,0.1,0.001,n,3.1e21,3.1e19,\"note, \"\"quoted\"\"\"")
        );
    }

    #[test]
    fn base64_follows_rfc_4648() {
        for (plain, encoded) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(plain.as_bytes()), encoded);
        }
    }

    #[test]
    fn figures_are_widened_until_their_smallest_text_is_legible() {
        let svg = r#"<svg width="640" height="454" font-size="12"><text font-size="8">x</text></svg>"#;
        assert_eq!(figure_width(svg), (640.0, 800.0));
        let svg = r#"<svg width="1280" height="454" font-size="12"><text font-size="11">x</text></svg>"#;
        assert_eq!(figure_width(svg), (1280.0, 1280.0));
    }

    #[test]
    fn raised_flags_are_counted_by_name() {
        let frame = df!(
            "flags" => ["", "current_reversal", "current_reversal,geometry"],
            "quality_ok" => [true, false, false],
        )
        .unwrap();
        let html = flags_html(&frame).unwrap();
        assert!(html.contains("2 of 3 rows flagged"), "{html}");
        assert!(html.contains("<code>current_reversal</code> on 2"), "{html}");
        assert!(html.contains("<code>geometry</code> on 1"), "{html}");
    }
}
