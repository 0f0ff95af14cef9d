//! `report.samples` and `report.render`: one self-contained HTML page per sample that a lab
//! can file with the wafer — every dataset that holds the sample, its figures, tables,
//! quality flags and provenance (which readings, which analyses with which parameters,
//! which versions).
//!
//! Self-contained means no external resource at all: styles inline, figures as inline SVG
//! drawn by mobilis-plot, so the page opens the same on any machine, years later.

use crate::errors::{ServiceError, ServiceResult};
use crate::plots::filter_rows;
use crate::service::Service;
use crate::store::{Dataset, Provenance};
use mobilis_core::abi;
use mobilis_core::units::{customary_display, format_number};
use polars::prelude::*;
use serde_json::{json, Map, Value};
use std::collections::BTreeSet;
use std::fmt::Write;
use std::sync::Arc;

/// The column that names the sample a row belongs to.
pub const SAMPLE_COLUMN: &str = "sample";
/// Rows shown of a dataset produced by an analysis (they are few: one per temperature or peak).
const ANALYSIS_ROWS_SHOWN: usize = 200;
/// Rows shown of imported data, which can be large: the full table stays in the workspace.
const IMPORTED_ROWS_SHOWN: usize = 12;

fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// The distinct sample names of a dataset, if it has a text `sample` column.
fn samples_of(dataset: &Dataset) -> BTreeSet<String> {
    let Ok(column) = dataset.frame.column(SAMPLE_COLUMN) else {
        return BTreeSet::new();
    };
    let Ok(strings) = column.str() else {
        return BTreeSet::new();
    };
    strings.iter().flatten().map(str::to_owned).collect()
}

/// A cell as the report shows it, numbers in the column's customary unit.
fn cell_text(value: AnyValue, factor: f64) -> String {
    match value {
        AnyValue::Null => String::new(),
        AnyValue::Boolean(flag) => if flag { "yes" } else { "no" }.into(),
        AnyValue::String(text) => text.to_owned(),
        AnyValue::StringOwned(text) => text.to_string(),
        other => match other.extract::<f64>() {
            Some(number) if matches!(other, AnyValue::Float32(_) | AnyValue::Float64(_)) => {
                if number.is_finite() {
                    format_number(number * factor)
                } else {
                    String::new()
                }
            }
            Some(number) => format!("{number}"),
            None => other.to_string(),
        },
    }
}

/// An HTML table of the first `limit` rows, in customary units, without the sample column.
fn table_html(frame: &DataFrame, limit: usize) -> String {
    let columns: Vec<&Column> = frame
        .columns()
        .iter()
        .filter(|c| c.name().as_str() != SAMPLE_COLUMN)
        .collect();
    let displays: Vec<(String, f64)> = columns
        .iter()
        .map(|c| match customary_display(c.name()) {
            Some(display) => (display.label, display.factor),
            None => (c.name().to_string(), 1.0),
        })
        .collect();
    let mut html = String::from("<div class=\"table-wrap\"><table><thead><tr>");
    for (label, _) in &displays {
        let _ = write!(html, "<th>{}</th>", escape(label));
    }
    html.push_str("</tr></thead><tbody>");
    for row in 0..frame.height().min(limit) {
        html.push_str("<tr>");
        for (column, (_, factor)) in columns.iter().zip(&displays) {
            let value = column.get(row).unwrap_or(AnyValue::Null);
            let _ = write!(html, "<td>{}</td>", escape(&cell_text(value, *factor)));
        }
        html.push_str("</tr>");
    }
    html.push_str("</tbody></table></div>");
    if frame.height() > limit {
        let _ = write!(
            html,
            "<p class=\"note\">First {limit} of {} rows; the whole table is in the workspace (dataset.rows, dataset.export).</p>",
            frame.height()
        );
    }
    html
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
        "<p class=\"flags raised\">Quality flags: {flagged} of {} rows flagged — {}. Thresholds and meanings: DEVELOPERS.md, hall.reduce.</p>",
        frame.height(),
        list.join(", ")
    ))
}

fn provenance_html(provenance: &Provenance) -> String {
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
            group_by,
            summary,
        } => {
            let inputs: Vec<String> = inputs
                .iter()
                .map(|(role, dataset)| {
                    format!(
                        "{} = <a href=\"#dataset-{}\">{}</a>",
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
                let _ = write!(text, ", run per {}", escape(&group_by.join(", ")));
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
header { padding: 28px 40px 18px; border-bottom: 3px solid var(--accent); background: #fff; }
header h1 { margin: 0 0 4px; font-size: 26px; letter-spacing: 0.01em; }
header .meta { color: var(--muted); font-size: 13px; }
main { padding: 8px 40px 40px; max-width: 1180px; }
section.dataset { margin-top: 30px; padding-top: 10px; border-top: 1px solid var(--rule); }
section.dataset h2 { font-size: 19px; margin: 0 0 6px; color: var(--accent); }
.provenance { color: var(--muted); font-size: 13px; margin: 0 0 10px; }
.figures { display: flex; flex-wrap: wrap; gap: 16px; margin: 12px 0; }
figure.plot { margin: 0; background: #fff; border: 1px solid var(--rule); border-radius: 4px; padding: 6px; flex: 1 1 480px; max-width: 660px; }
figure.plot svg { display: block; width: 100%; height: auto; }
figure.plot figcaption { font-size: 12px; color: var(--muted); padding: 2px 4px; }
.table-wrap { overflow-x: auto; border: 1px solid var(--rule); background: #fff; }
table { border-collapse: collapse; font-size: 12px; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 8px; border-bottom: 1px solid #eceff4; text-align: right; white-space: nowrap; }
th { background: #f0f3f6; position: sticky; top: 0; font-weight: 600; }
.note { color: var(--muted); font-size: 12px; }
.flags { padding: 6px 10px; border-left: 4px solid; font-size: 13px; }
.flags.ok { border-color: var(--accent); background: #eef6f5; }
.flags.raised { border-color: var(--warn); background: #fbf0ea; }
.caution { font-size: 12px; color: var(--muted); border-top: 1px solid var(--rule); margin-top: 36px; padding-top: 10px; }
code { font-size: 12px; background: #eef0f4; padding: 0 3px; border-radius: 2px; word-break: break-word; }
@media print { body { background: #fff; } header { border-bottom-width: 2px; } section.dataset { break-inside: avoid-page; } }
"#;

/// Counts the figures the browser laid out, for automated checks of a filed report.
const LAYOUT_CHECK: &str = r#"
window.addEventListener("load", function () {
  var drawn = 0, figures = document.querySelectorAll("figure.plot svg");
  figures.forEach(function (svg) { var box = svg.getBoundingClientRect(); if (box.width > 0 && box.height > 0) drawn += 1; });
  document.documentElement.setAttribute("data-figures", String(figures.length));
  document.documentElement.setAttribute("data-figures-drawn", String(drawn));
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

impl Service {
    /// Every sample named in a `sample` column, with the datasets that hold it.
    pub fn report_samples(&self) -> Value {
        let mut samples: std::collections::BTreeMap<String, Vec<String>> = Default::default();
        for dataset in self.store.list() {
            for sample in samples_of(&dataset) {
                samples.entry(sample).or_default().push(dataset.manifest.name.clone());
            }
        }
        Value::Array(
            samples
                .into_iter()
                .map(|(sample, datasets)| json!({ "sample": sample, "datasets": datasets }))
                .collect(),
        )
    }

    /// The HTML page of one sample.
    pub fn report_render(&self, sample: &str) -> ServiceResult<Value> {
        let mut datasets: Vec<Arc<Dataset>> = self
            .store
            .list()
            .into_iter()
            .filter(|d| samples_of(d).contains(sample))
            .collect();
        if datasets.is_empty() {
            let known: Vec<String> = self
                .report_samples()
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(|s| s["sample"].as_str().map(str::to_owned))
                .collect();
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
        let all = self.store.list();
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
        let mut body = String::new();
        let mut figures_drawn = 0usize;
        let mut contents = Vec::new();
        for dataset in &datasets {
            let name = &dataset.manifest.name;
            let frame = filter_rows(&dataset.frame, &filter)?;
            let _ = write!(
                body,
                "<section class=\"dataset\" id=\"dataset-{}\"><h2>{}</h2><p class=\"provenance\">{} {} rows of this sample (of {} in the dataset); stored {}.</p>",
                escape(name),
                escape(name),
                provenance_html(&dataset.manifest.provenance),
                frame.height(),
                dataset.frame.height(),
                escape(&dataset.manifest.created)
            );
            if let Some(flags) = flags_html(&frame) {
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
            let kinds: Vec<&str> = match analysis {
                Some(analysis) => mobilis_plot::kinds_for(Some(analysis))
                    .into_iter()
                    .filter(|k| *k != "columns")
                    .collect(),
                None => Vec::new(),
            };
            let mut drawn = Vec::new();
            let mut not_drawn = Vec::new();
            for kind in kinds {
                let options = mobilis_plot::PlotOptions {
                    kind: Some(kind.to_owned()),
                    analysis: analysis.map(str::to_owned),
                    ..Default::default()
                };
                match mobilis_plot::build(&frame, name, &options) {
                    Ok(figure) => drawn.push(format!(
                        "<figure class=\"plot\" data-kind=\"{}\">{}<figcaption>figure kind {} (plot.render)</figcaption></figure>",
                        escape(kind),
                        figure.to_svg(),
                        escape(kind)
                    )),
                    Err(error) => not_drawn.push(format!("{kind}: {error}")),
                }
            }
            if !drawn.is_empty() {
                figures_drawn += drawn.len();
                let _ = write!(body, "<div class=\"figures\">{}</div>", drawn.join(""));
            }
            for reason in &not_drawn {
                let _ = write!(body, "<p class=\"note\">Not drawn: {}</p>", escape(reason));
            }
            let limit = if analysis.is_some() || matches!(dataset.manifest.provenance, Provenance::Analysis { .. }) {
                ANALYSIS_ROWS_SHOWN
            } else {
                IMPORTED_ROWS_SHOWN
            };
            body.push_str(&table_html(&frame, limit));
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
<script>{LAYOUT_CHECK}</script></head><body><header><h1>Sample {sample_escaped}</h1>\
<div class=\"meta\">Transport report generated {generated} by mobilisd {version} (plugin ABI {major}.{minor}); plugins: {plugins}.<br>\
Datasets: {toc}</div></header><main>{body}\
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
        Ok(json!({
            "sample": sample,
            "datasets": contents,
            "figures": figures_drawn,
            "html": html,
        }))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

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
        let html = table_html(&frame, 1);
        assert!(html.contains("<th>density_cm3</th>"), "{html}");
        assert!(html.contains("<td>3.000e15</td>"), "{html}");
        assert!(!html.contains("W1") && !html.contains(">sample<"), "{html}");
        assert!(html.contains("First 1 of 2 rows"), "{html}");
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
