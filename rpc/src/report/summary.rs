//! The results summary at the top of a sample's page: what the lab delivers for the sample,
//! read from what the analyses stored, never computed again.
//!
//! Where the numbers come from:
//! - an analysis output keeps its run's summary in its provenance (`run_summary`); the groups
//!   of this sample (or an ungrouped summary of this sample alone) give their key numbers:
//!   every number `X` with a number `X_unc` beside it, in the order the plugin wrote them,
//!   and every carrier of a `carriers` or `peaks` list (type, density, mobility);
//! - a summary table (`summary_output`) stands in for a run summary a workspace written
//!   before those were kept lacks;
//! - a table of one row per sample (`carriers.purity`) gives its `X`/`X_unc` columns;
//! - `hall.reduce` gives the rows at the reference temperatures: the measured temperatures
//!   nearest 300 K and 77 K, and the lowest.
//!
//! Fit quality (reduced chi-square, p-value, Birge ratio) and flags (parameters at a bound,
//! calibrations not stated, one field sign, counts that disagree, the run's warnings) go
//! with each block.
//!
//! So a plugin's numbers reach the page without touching the report:
//!
//! - `analysis.run` keeps the summary it answers (per group under `groups`) and its warnings in
//!   the output dataset's manifest (`provenance.run_summary`, `provenance.warnings`; manifests
//!   written before have neither and load as before).
//! - A group belongs to the sample when its `sample` group value (or the summary's own
//!   `sample`) names it; an ungrouped summary without one counts when the dataset holds that
//!   sample only.
//! - A key number `X` is shown as `X ± X_unc` in the unit its suffix names (`_m3` cm⁻³, `_m2`
//!   cm⁻², `_m2_per_Vs` cm²/(V s), `_ohm_m` Ω cm, `_eV` meV, `_s` ps, `_m` nm or µm, `_K`,
//!   `_T`; no suffix: a ratio), rounded by `mobilis_physics::quote` (two significant digits of the
//!   uncertainty, GUM 7.2.6). `_unc_stat` and `_unc_sys` parts stay in the provenance. A label
//!   table here names the well-known ones (N_D, E_D, F, m*/m0, l_phi ...); others read as their
//!   key.
//! - A carrier is an object of a `carriers` or `peaks` list with `carrier_type` and
//!   `sheet_density_m2` (or `density_m3`) and/or `mobility_m2_per_Vs`, with their `_unc`.
//! - Quality and flags: `reduced_chi_square`, `chi_square_p_value`, `birge_ratio` (also with a
//!   `dingle_` prefix), `r_squared`; a flag for p < 0.001, a non-empty `at_bound`, a non-empty
//!   `calibrations_not_stated`, `single_field_sign: true`, `freeze_out_consistent: false`, a
//!   carrier's `at_bound` or `at_grid_edge`, and the run's warnings. Conditions come from the
//!   group's other values (`at 2.000 K`), `temperature_min_K`/`temperature_max_K` and
//!   `temperatures_K`.
//! - `hall.reduce` is the one analysis read by name.

use super::text::{escape, SAMPLE_COLUMN};
use crate::store::{Dataset, Provenance};
use mobilis_physics::quote::{self, Notation};
use polars::prelude::*;
use serde_json::{Map, Value};
use std::fmt::Write;

/// A number without an uncertainty, four significant digits, as the page prints it.
fn plain(value: f64) -> String {
    quote::number(value, Notation::Typeset)
}

/// One key number.
pub struct Quantity {
    /// What it is, as HTML.
    pub label: String,
    /// The value and its uncertainty as printed, with the unit.
    pub text: String,
}

/// The key numbers of one run (one group of it) for the sample.
pub struct Block {
    /// The analysis and what the block is about, as HTML.
    pub title: String,
    /// The dataset the numbers were read from.
    pub dataset: String,
    pub quantities: Vec<Quantity>,
    /// Carriers: type, density, mobility, as printed.
    pub carriers: Vec<[String; 3]>,
    /// A table of rows (hall.reduce's reference temperatures): header and cells, as HTML.
    pub table: Option<(Vec<String>, Vec<Vec<String>>)>,
    /// Fit quality, as HTML.
    pub quality: Vec<String>,
    /// Flags and warnings, as HTML.
    pub flags: Vec<String>,
}

impl Block {
    fn new(title: String, dataset: &str) -> Self {
        Block {
            title,
            dataset: dataset.to_owned(),
            quantities: Vec::new(),
            carriers: Vec::new(),
            table: None,
            quality: Vec::new(),
            flags: Vec::new(),
        }
    }

    fn is_empty(&self) -> bool {
        self.quantities.is_empty() && self.carriers.is_empty() && self.table.is_none()
    }
}

/// The label of a key number; `majority` is the carrier type of the fit (`n` or `p`).
fn label(analysis: &str, key: &str, majority: &str) -> String {
    let (dopant, compensating, level) = if majority == "p" {
        ("N<sub>A</sub>", "N<sub>D</sub>", "E<sub>A</sub>")
    } else {
        ("N<sub>D</sub>", "N<sub>A</sub>", "E<sub>D</sub>")
    };
    let known = match (analysis, key) {
        (_, "dopant_density_m3") => format!("{dopant}, majority dopants"),
        ("carriers.mobility_scattering", "compensating_density_m3") => {
            format!("{compensating} from the mobility")
        }
        (_, "compensating_density_m3") => format!("{compensating}, compensating"),
        (_, "net_density_m3") => format!("net doping {dopant} − {compensating}"),
        (_, "compensation_ratio") => format!("compensation {compensating}/{dopant}"),
        (_, "ionization_energy_eV") => format!("{level}, level below its band edge"),
        (_, "activation_energy_eV") => "activation energy E<sub>a</sub> (Arrhenius)".into(),
        (_, "lattice_exponent") => "lattice exponent α (μ<sub>L</sub> ∝ T<sup>−α</sup>)".into(),
        (_, "lattice_mobility_300K_m2_per_Vs") => "lattice mobility μ<sub>L</sub>(300 K)".into(),
        (_, "ionized_impurity_density_m3") => "ionized impurities N<sub>I</sub>".into(),
        (_, "density_ratio") => "scattering / freeze-out count".into(),
        (_, "frequency_T") => "SdH frequency F".into(),
        ("mr.oscillations", "sheet_density_m2") => "2D density n = g<sub>s</sub>eF/h".into(),
        (_, "effective_mass_ratio") => "effective mass m*/m<sub>0</sub>".into(),
        (_, "dingle_temperature_K") => "Dingle temperature T<sub>D</sub>".into(),
        (_, "quantum_lifetime_s") => "quantum lifetime τ<sub>q</sub>".into(),
        (_, "phase_coherence_length_m") => "phase-coherence length l<sub>φ</sub>".into(),
        (_, "alpha") => "HLN prefactor α".into(),
        (_, "donor_density_m3") => "donors N<sub>D</sub>".into(),
        (_, "acceptor_density_m3") => "acceptors N<sub>A</sub>".into(),
        (_, "net_doping_m3") => "net doping |N<sub>D</sub> − N<sub>A</sub>|".into(),
        (_, "total_impurity_density_m3") => "impurities N<sub>D</sub> + N<sub>A</sub>".into(),
        (_, "scattering_ionized_density_m3") => "N<sub>I</sub> from the mobility".into(),
        (_, "scattering_compensating_density_m3") => "compensating density from the mobility".into(),
        _ => String::new(),
    };
    if !known.is_empty() {
        return known;
    }
    // Unknown keys read as their name without the unit token.
    let stem = quote::summary_unit(key, 0.0).map_or_else(|| key.to_owned(), |unit| unit.quantity);
    escape(&stem.replace('_', " "))
}

/// `value ± uncertainty unit` of an SI value and its uncertainty.
fn quantity_text(key: &str, value: f64, uncertainty: Option<f64>) -> String {
    match quote::summary_unit(key, value) {
        Some(unit) => format!(
            "{} {}",
            quote::with_uncertainty(
                value * unit.factor,
                uncertainty.map(|u| u * unit.factor),
                Notation::Typeset
            ),
            unit.typeset
        ),
        None => quote::with_uncertainty(value, uncertainty, Notation::Typeset),
    }
}

/// The key numbers of a summary object: every number with an `_unc` number beside it.
fn key_numbers(analysis: &str, summary: &Map<String, Value>, block: &mut Block) {
    let majority = summary.get("carrier_type").and_then(Value::as_str).unwrap_or("n");
    for (key, value) in summary {
        let (Some(value), Some(uncertainty)) = (
            value.as_f64(),
            summary.get(&format!("{key}_unc")).and_then(Value::as_f64),
        ) else {
            continue;
        };
        block.quantities.push(Quantity {
            label: label(analysis, key, majority),
            text: quantity_text(key, value, Some(uncertainty)),
        });
    }
    for list in ["carriers", "peaks"] {
        for carrier in summary.get(list).and_then(Value::as_array).into_iter().flatten() {
            let number = |key: &str| {
                let value = carrier[key].as_f64()?;
                Some(quantity_text(key, value, carrier[format!("{key}_unc")].as_f64()))
            };
            let density = number("sheet_density_m2").or_else(|| number("density_m3"));
            let mobility = number("mobility_m2_per_Vs");
            if density.is_none() && mobility.is_none() {
                continue;
            }
            let mut kind = escape(carrier["carrier_type"].as_str().unwrap_or("?"));
            if list == "peaks" {
                kind.push_str(" (spectrum peak)");
            }
            if carrier["at_bound"].as_bool() == Some(true) {
                block
                    .flags
                    .push(format!("a {kind} carrier's fit parameter sits at its bound"));
            }
            if carrier["at_grid_edge"].as_bool() == Some(true) {
                block
                    .flags
                    .push(format!("a {kind} peak sits at the edge of the mobility grid"));
            }
            block
                .carriers
                .push([kind, density.unwrap_or_default(), mobility.unwrap_or_default()]);
        }
    }
}

/// Fit quality and flags of a summary object.
fn quality_and_flags(summary: &Map<String, Value>, block: &mut Block) {
    for prefix in ["", "dingle_"] {
        let number = |key: &str| summary.get(&format!("{prefix}{key}")).and_then(Value::as_f64);
        let mut parts = Vec::new();
        if let Some(reduced) = number("reduced_chi_square") {
            parts.push(format!("χ²/ν = {}", plain(reduced)));
        }
        if let Some(p) = number("chi_square_p_value") {
            parts.push(format!("p = {}", plain(p)));
        }
        if let Some(birge) = number("birge_ratio").filter(|b| *b > 1.0) {
            parts.push(format!("uncertainties scaled by the Birge ratio {}", plain(birge)));
        }
        if parts.is_empty() {
            continue;
        }
        let what = if prefix.is_empty() { "fit" } else { "Dingle fit" };
        block.quality.push(format!("{what}: {}", parts.join(", ")));
        if number("chi_square_p_value").is_some_and(|p| p < 1e-3) {
            block.flags.push(format!(
                "{what}: p &lt; 0.001, the model or the stated uncertainties do not describe the points"
            ));
        }
    }
    if let Some(r2) = summary.get("r_squared").and_then(Value::as_f64) {
        block.quality.push(format!("R² = {}", plain(r2)));
    }
    let list = |key: &str| -> Vec<String> {
        match summary.get(key) {
            Some(Value::Array(items)) => items
                .iter()
                .map(|i| escape(i.as_str().map_or(&i.to_string(), |s| s)))
                .collect(),
            _ => Vec::new(),
        }
    };
    let at_bound = list("at_bound");
    if !at_bound.is_empty() {
        block
            .flags
            .push(format!("at a bound of the fit: {}", at_bound.join(", ")));
    }
    let not_stated = list("calibrations_not_stated");
    if !not_stated.is_empty() {
        block.flags.push(format!(
            "calibrations not stated, common-practice values assumed: {}",
            not_stated.join(", ")
        ));
    }
    if summary.get("single_field_sign").and_then(Value::as_bool) == Some(true) {
        block
            .flags
            .push("one field sign only: used as measured, not symmetrized".into());
    }
    match summary.get("freeze_out_consistent").and_then(Value::as_bool) {
        Some(true) => block.quality.push("freeze-out and scattering counts agree".into()),
        Some(false) => block.flags.push("the freeze-out and scattering counts disagree".into()),
        None => {}
    }
}

/// What a group or summary says about the conditions: temperature, fitted range, sweeps.
fn conditions(group: &Map<String, Value>, summary: &Map<String, Value>) -> String {
    let mut parts = Vec::new();
    for (key, value) in group {
        if key == SAMPLE_COLUMN {
            continue;
        }
        match value.as_f64() {
            Some(number) if key.ends_with("_K") => parts.push(format!("at {} K", plain(number))),
            Some(number) => parts.push(format!("{} = {}", escape(key), plain(number))),
            None => parts.push(format!("{} = {}", escape(key), escape(value.as_str().unwrap_or("?")))),
        }
    }
    if let (Some(low), Some(high)) = (
        summary.get("temperature_min_K").and_then(Value::as_f64),
        summary.get("temperature_max_K").and_then(Value::as_f64),
    ) {
        parts.push(format!("fitted from {} K to {} K", plain(low), plain(high)));
    }
    if let Some(temperatures) = summary.get("temperatures_K").and_then(Value::as_array) {
        let list: Vec<String> = temperatures
            .iter()
            .filter_map(Value::as_f64)
            .map(|t| format!("{}", (t * 100.0).round() / 100.0))
            .collect();
        parts.push(format!("sweeps at {} K", list.join(", ")));
    }
    parts.join(", ")
}

/// One group of a run: its group values, its summary and its warnings.
type Group<'a> = (Map<String, Value>, &'a Map<String, Value>, Vec<String>);

/// The summaries of a run that belong to `sample`, with their group and warnings.
fn groups_of<'a>(
    run_summary: &'a Value,
    run_warnings: &'a [String],
    sample: &str,
    only_this_sample: bool,
) -> Vec<Group<'a>> {
    let belongs = |group: &Map<String, Value>, summary: &Map<String, Value>| match group
        .get(SAMPLE_COLUMN)
        .or_else(|| summary.get(SAMPLE_COLUMN))
    {
        Some(Value::String(name)) => name == sample,
        _ => only_this_sample,
    };
    match run_summary.get("groups").and_then(Value::as_array) {
        Some(groups) => groups
            .iter()
            .filter_map(|g| {
                let group = g["group"].as_object().cloned().unwrap_or_default();
                let summary = g["summary"].as_object()?;
                let warnings = g["warnings"]
                    .as_array()
                    .into_iter()
                    .flatten()
                    .filter_map(|w| w.as_str().map(str::to_owned))
                    .collect();
                belongs(&group, summary).then_some((group, summary, warnings))
            })
            .collect(),
        None => match run_summary.as_object() {
            Some(summary) if belongs(&Map::new(), summary) => vec![(Map::new(), summary, run_warnings.to_vec())],
            _ => Vec::new(),
        },
    }
}

/// A dataset's rows of the sample as JSON objects (column name to value).
fn rows_as_objects(frame: &DataFrame) -> Vec<Map<String, Value>> {
    (0..frame.height())
        .map(|row| {
            frame
                .columns()
                .iter()
                .map(|column| {
                    let value = match column.get(row).unwrap_or(AnyValue::Null) {
                        AnyValue::Null => Value::Null,
                        AnyValue::Boolean(b) => Value::Bool(b),
                        AnyValue::String(s) => Value::String(s.to_owned()),
                        AnyValue::StringOwned(s) => Value::String(s.to_string()),
                        other => other
                            .extract::<f64>()
                            .filter(|v| v.is_finite())
                            .map_or(Value::Null, Value::from),
                    };
                    (column.name().to_string(), value)
                })
                .collect()
        })
        .collect()
}

/// hall.reduce's rows at the reference temperatures: nearest 300 K, nearest 77 K, lowest.
fn hall_reference_rows(frame: &DataFrame, block: &mut Block) {
    let rows = rows_as_objects(frame);
    let temperature = |row: &Map<String, Value>| row.get("temperature_K").and_then(Value::as_f64);
    let nearest = |target: f64| {
        (0..rows.len())
            .filter(|&i| temperature(&rows[i]).is_some())
            .min_by(|&a, &b| {
                let da = (temperature(&rows[a]).unwrap() - target).abs();
                let db = (temperature(&rows[b]).unwrap() - target).abs();
                da.total_cmp(&db)
            })
    };
    let lowest = (0..rows.len())
        .filter(|&i| temperature(&rows[i]).is_some())
        .min_by(|&a, &b| {
            temperature(&rows[a])
                .unwrap()
                .total_cmp(&temperature(&rows[b]).unwrap())
        });
    let mut chosen: Vec<(usize, Vec<&str>)> = Vec::new();
    for (which, row) in [
        ("nearest 300 K", nearest(300.0)),
        ("nearest 77 K", nearest(77.0)),
        ("lowest", lowest),
    ] {
        let Some(row) = row else { continue };
        match chosen.iter_mut().find(|(r, _)| *r == row) {
            Some((_, names)) => names.push(which),
            None => chosen.push((row, vec![which])),
        }
    }
    chosen.sort_by(|a, b| {
        temperature(&rows[b.0])
            .unwrap()
            .total_cmp(&temperature(&rows[a.0]).unwrap())
    });
    let cell = |row: &Map<String, Value>, key: &str| -> Option<String> {
        let value = row.get(key)?.as_f64()?;
        Some(quantity_text(
            key,
            value,
            row.get(&format!("{key}_unc")).and_then(Value::as_f64),
        ))
    };
    let header = vec![
        "T".to_owned(),
        "reference".to_owned(),
        "type".to_owned(),
        "density".to_owned(),
        "Hall mobility μ<sub>H</sub>".to_owned(),
        "resistivity ρ".to_owned(),
        "flags".to_owned(),
    ];
    let mut cells = Vec::new();
    for (index, names) in &chosen {
        let row = &rows[*index];
        let kind = row.get("carrier_type").and_then(Value::as_str).unwrap_or("?");
        let symbol = if kind == "p" { "p" } else { "n" };
        // A film without a thickness has a sheet density and a sheet resistance only.
        let density = cell(row, "density_m3")
            .map(|d| format!("{symbol} = {d}"))
            .or_else(|| cell(row, "sheet_density_m2").map(|d| format!("{symbol}<sub>s</sub> = {d}")))
            .unwrap_or_default();
        let resistivity = cell(row, "resistivity_ohm_m")
            .or_else(|| cell(row, "sheet_resistance_ohm_sq"))
            .unwrap_or_default();
        let flags = row
            .get("flags")
            .and_then(Value::as_str)
            .filter(|f| !f.is_empty())
            .map(escape)
            .unwrap_or_else(|| "none".into());
        cells.push(vec![
            format!("{} K", plain(temperature(row).unwrap())),
            names.join(", "),
            escape(kind),
            density,
            cell(row, "hall_mobility_m2_per_Vs").unwrap_or_default(),
            resistivity,
            flags,
        ]);
    }
    if !cells.is_empty() {
        block.table = Some((header, cells));
    }
}

/// The key numbers of a table of one row per sample (`carriers.purity`, a summary table).
fn one_row_numbers(analysis: &str, frame: &DataFrame, block: &mut Block) {
    let Some(row) = rows_as_objects(frame).into_iter().next() else {
        return;
    };
    key_numbers(analysis, &row, block);
    quality_and_flags(&row, block);
    if let Some(candidates) = row.get("candidate_dopants").and_then(Value::as_str) {
        if !candidates.is_empty() {
            block.quality.push(format!("candidate dopants: {}", escape(candidates)));
        }
    }
}

/// Every block of results for `sample`, in the order of `datasets` (the order the work went).
/// `frames` are the datasets' rows of the sample.
pub fn blocks(sample: &str, datasets: &[(&Dataset, DataFrame)]) -> Vec<Block> {
    // Runs whose output keeps its summary: their summary tables add nothing.
    let kept: Vec<(&str, &serde_json::Value, &std::collections::BTreeMap<String, String>)> = datasets
        .iter()
        .filter_map(|(d, _)| match &d.manifest.provenance {
            Provenance::Analysis {
                analysis,
                params,
                inputs,
                summary: false,
                run_summary,
                ..
            } if !run_summary.is_null() => Some((analysis.as_str(), params, inputs)),
            _ => None,
        })
        .collect();
    let mut blocks = Vec::new();
    for (dataset, frame) in datasets {
        let Provenance::Analysis {
            analysis,
            params,
            inputs,
            summary: is_summary_table,
            run_summary,
            warnings,
            ..
        } = &dataset.manifest.provenance
        else {
            continue;
        };
        let name = &dataset.manifest.name;
        let only_this_sample = super::text::samples_of(dataset).len() == 1;
        if analysis == "hall.reduce" && !is_summary_table {
            let mut block = Block::new(
                format!(
                    "<code>hall.reduce</code>: carrier type, density, Hall mobility and resistivity at the reference temperatures ({} measured)",
                    frame.height()
                ),
                name,
            );
            hall_reference_rows(frame, &mut block);
            for (_, summary, group_warnings) in groups_of(run_summary, warnings, sample, only_this_sample) {
                quality_and_flags(summary, &mut block);
                block.flags.extend(group_warnings.iter().map(|w| escape(w)));
            }
            if let Some(flagged) = frame.column("flags").ok().and_then(|c| c.str().ok().cloned()) {
                let count = flagged.iter().flatten().filter(|f| !f.is_empty()).count();
                if count > 0 {
                    block.flags.push(format!(
                        "{count} of {} temperatures carry a quality flag (table below)",
                        frame.height()
                    ));
                }
            }
            blocks.push(block);
            continue;
        }
        if !run_summary.is_null() {
            // One block per run: with several groups of the sample (temperatures), each
            // carrier and number says which group it belongs to.
            let groups = groups_of(run_summary, warnings, sample, only_this_sample);
            let several = groups.len() > 1;
            let mut block = Block::new(format!("<code>{}</code>", escape(analysis)), name);
            let mut flags_by_group: Vec<(String, Vec<String>)> = Vec::new();
            for (group, summary, group_warnings) in &groups {
                let condition = conditions(group, summary);
                let mut part = Block::new(String::new(), name);
                key_numbers(analysis, summary, &mut part);
                quality_and_flags(summary, &mut part);
                part.flags.extend(group_warnings.iter().map(|w| escape(w)));
                if several && !condition.is_empty() {
                    for quantity in &mut part.quantities {
                        quantity.label = format!("{}, {condition}", quantity.label);
                    }
                    for carrier in &mut part.carriers {
                        carrier[0] = format!("{}, {condition}", carrier[0]);
                    }
                    for line in part.quality.iter_mut() {
                        *line = format!("{condition}: {line}");
                    }
                } else if !condition.is_empty() {
                    block.title = format!("{}, {condition}", block.title);
                }
                block.quantities.extend(part.quantities);
                block.carriers.extend(part.carriers);
                block.quality.extend(part.quality);
                flags_by_group.push((condition, part.flags));
            }
            // A flag every group raises is said once; others say which groups raise them.
            let mut said: Vec<&String> = Vec::new();
            for (_, flags) in &flags_by_group {
                for flag in flags {
                    if said.contains(&flag) {
                        continue;
                    }
                    said.push(flag);
                    let raising: Vec<&str> = flags_by_group
                        .iter()
                        .filter(|(_, f)| f.contains(flag))
                        .map(|(c, _)| c.as_str())
                        .collect();
                    if raising.len() == flags_by_group.len() || raising.iter().all(|c| c.is_empty()) {
                        block.flags.push(flag.clone());
                    } else {
                        block.flags.push(format!("{}: {flag}", raising.join("; ")));
                    }
                }
            }
            if !block.is_empty() {
                blocks.push(block);
                continue;
            }
        }
        // A summary table of a run whose output keeps the summary adds nothing.
        if *is_summary_table
            && kept
                .iter()
                .any(|(a, p, i)| a == analysis && *p == params && *i == inputs)
        {
            continue;
        }
        // Tables of one row per sample: carriers.purity, and summary tables of a workspace
        // written before run summaries were kept.
        if frame.height() == 1 {
            let mut block = Block::new(format!("<code>{}</code>", escape(analysis)), name);
            one_row_numbers(analysis, frame, &mut block);
            if !block.is_empty() {
                blocks.push(block);
            }
        }
    }
    blocks
}

/// The results section of the page.
pub fn html(blocks: &[Block]) -> String {
    let mut html = String::from("<section class=\"results\" id=\"results\"><h2>Results</h2>");
    if blocks.is_empty() {
        html.push_str("<p class=\"note\">No analysis has results for this sample yet; its data follow.</p></section>");
        return html;
    }
    html.push_str(
        "<p class=\"note\">Each value ± one standard uncertainty (coverage factor k = 1), the uncertainty to two significant digits; read from what the analyses stored.</p>",
    );
    for block in blocks {
        let _ = write!(
            html,
            "<div class=\"result\"><h3>{} <span class=\"from\">— <a href=\"#dataset-{}\">{}</a></span></h3>",
            block.title,
            escape(&block.dataset),
            escape(&block.dataset)
        );
        if let Some((header, rows)) = &block.table {
            html.push_str("<table class=\"key\"><thead><tr>");
            for cell in header {
                let _ = write!(html, "<th>{cell}</th>");
            }
            html.push_str("</tr></thead><tbody>");
            for row in rows {
                html.push_str("<tr>");
                for cell in row {
                    let _ = write!(html, "<td>{cell}</td>");
                }
                html.push_str("</tr>");
            }
            html.push_str("</tbody></table>");
        }
        if !block.quantities.is_empty() {
            html.push_str("<table class=\"key quantities\"><tbody>");
            for quantity in &block.quantities {
                let _ = write!(html, "<tr><th>{}</th><td>{}</td></tr>", quantity.label, quantity.text);
            }
            html.push_str("</tbody></table>");
        }
        if !block.carriers.is_empty() {
            html.push_str(
                "<table class=\"key\"><thead><tr><th>carrier</th><th>density</th><th>mobility</th></tr></thead><tbody>",
            );
            for [kind, density, mobility] in &block.carriers {
                let _ = write!(html, "<tr><td>{kind}</td><td>{density}</td><td>{mobility}</td></tr>");
            }
            html.push_str("</tbody></table>");
        }
        if !block.quality.is_empty() {
            let _ = write!(html, "<p class=\"quality\">{}.</p>", block.quality.join("; "));
        }
        for flag in &block.flags {
            let _ = write!(html, "<p class=\"flags raised\">{flag}</p>");
        }
        html.push_str("</div>");
    }
    html.push_str("</section>");
    html
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::{column_infos, Manifest, MANIFEST_FORMAT};
    use serde_json::json;

    fn dataset(name: &str, frame: DataFrame, provenance: Provenance) -> Dataset {
        let manifest = Manifest {
            format: MANIFEST_FORMAT,
            name: name.to_owned(),
            rows: frame.height(),
            columns: column_infos(&frame),
            created: "2026-01-01T00:00:00Z".into(),
            version: None,
            provenance,
        };
        Dataset::new(frame, manifest)
    }

    fn analysis(name: &str, summary: bool, run_summary: Value) -> Provenance {
        Provenance::Analysis {
            analysis: name.to_owned(),
            plugin: "carriers".into(),
            plugin_version: "0.1.0".into(),
            params: json!({}),
            inputs: [("hall".to_owned(), "w-hall".to_owned())].into_iter().collect(),
            input_versions: Default::default(),
            group_by: vec!["sample".into()],
            group_tolerance: Default::default(),
            summary,
            run_summary,
            warnings: Vec::new(),
        }
    }

    fn page(blocks: &[Block]) -> String {
        html(blocks)
    }

    #[test]
    fn a_kept_run_summary_gives_the_samples_key_numbers_and_flags() {
        let run_summary = json!({"groups": [
            {"group": {"sample": "W1"}, "warnings": ["few points"], "summary": {
                "carrier_type": "n", "dopant_density_m3": 3.0e21, "dopant_density_m3_unc": 3.8e19,
                "dopant_density_m3_unc_stat": 1e18, "ionization_energy_eV": 0.045,
                "ionization_energy_eV_unc": 9.4e-5, "reduced_chi_square": 0.9, "chi_square_p_value": 0.6,
                "at_bound": ["compensating_density_m3"]}},
            {"group": {"sample": "W2"}, "warnings": [], "summary": {
                "carrier_type": "n", "dopant_density_m3": 9.0e21, "dopant_density_m3_unc": 1e20}}
        ]});
        let frame = df!("sample" => ["W1"], "temperature_K" => [20.0]).unwrap();
        let fit = dataset(
            "w-fit",
            frame.clone(),
            analysis("carriers.freeze_out_fit", false, run_summary),
        );
        let blocks = blocks("W1", &[(&fit, frame)]);
        let text = page(&blocks);
        assert!(text.contains("N<sub>D</sub>, majority dopants"), "{text}");
        assert!(text.contains("(3.000 ± 0.038) × 10¹⁵ cm⁻³"), "{text}");
        assert!(text.contains("45.000 ± 0.094 meV"), "{text}");
        assert!(text.contains("χ²/ν = 0.9000, p = 0.6000"), "{text}");
        assert!(
            text.contains("at a bound of the fit: compensating_density_m3"),
            "{text}"
        );
        assert!(text.contains("few points"), "{text}");
        // The other sample's numbers and the partial uncertainties stay out.
        assert!(!text.contains("9.000") && !text.contains("unc_stat"), "{text}");
    }

    #[test]
    fn an_older_workspace_shows_its_summary_table_and_a_kept_summary_is_not_shown_twice() {
        let table = df!(
            "sample" => ["W1"],
            "activation_energy_eV" => [0.0432],
            "activation_energy_eV_unc" => [0.00085],
        )
        .unwrap();
        let points = df!("sample" => ["W1"], "temperature_K" => [20.0]).unwrap();
        let old_output = dataset(
            "w-arr",
            points.clone(),
            analysis("carriers.arrhenius", false, Value::Null),
        );
        let old_table = dataset(
            "w-arr-summary",
            table.clone(),
            analysis("carriers.arrhenius", true, Value::Null),
        );
        let text = page(&blocks(
            "W1",
            &[(&old_output, points.clone()), (&old_table, table.clone())],
        ));
        assert_eq!(text.matches("43.20 ± 0.85 meV").count(), 1, "{text}");
        assert!(text.contains("w-arr-summary"), "{text}");

        let kept = json!({"groups": [{"group": {"sample": "W1"}, "warnings": [], "summary": {
            "activation_energy_eV": 0.0432, "activation_energy_eV_unc": 0.00085,
            "temperature_min_K": 20.0, "temperature_max_K": 45.0}}]});
        let new_output = dataset("w-arr", points.clone(), analysis("carriers.arrhenius", false, kept));
        let text = page(&blocks("W1", &[(&new_output, points), (&old_table, table)]));
        assert_eq!(text.matches("43.20 ± 0.85 meV").count(), 1, "{text}");
        assert!(text.contains("fitted from 20.00 K to 45.00 K"), "{text}");
        assert!(!text.contains("w-arr-summary"), "{text}");
    }

    #[test]
    fn hall_rows_at_300_k_77_k_and_the_lowest_temperature() {
        let frame = df!(
            "sample" => ["W1"; 5],
            "temperature_K" => [20.0, 75.0, 80.0, 290.0, 310.0],
            "carrier_type" => ["n", "n", "n", "n", "p"],
            "density_m3" => [1e13, 1.5e21, 1.7e21, 2.8e21, 2.9e21],
            "density_m3_unc" => [1e11, 1.7e19, 2e19, 3.1e19, 3.2e19],
            "hall_mobility_m2_per_Vs" => [3.9, 2.5, 2.2, 0.18, 0.16],
            "resistivity_ohm_m" => [1e5, 0.002, 0.0019, 0.015, 0.016],
            "flags" => ["", "", "", "current_reversal", ""],
        )
        .unwrap();
        let hall = dataset(
            "w-hall",
            frame.clone(),
            analysis("hall.reduce", false, json!({"rows": 5})),
        );
        let blocks = blocks("W1", &[(&hall, frame)]);
        let (_, rows) = blocks[0].table.as_ref().unwrap();
        let temperatures: Vec<&str> = rows.iter().map(|r| r[0].as_str()).collect();
        // 290 K and 310 K are equally near 300 K: the first found is taken.
        assert_eq!(temperatures, ["290.0 K", "75.00 K", "20.00 K"]);
        assert_eq!(rows[0][1], "nearest 300 K");
        assert_eq!(rows[0][3], "n = (2.800 ± 0.031) × 10¹⁵ cm⁻³");
        assert_eq!(rows[0][5], "1.500 Ω cm");
        assert_eq!(rows[0][6], "current_reversal");
        assert_eq!(rows[2][1], "lowest");
        assert!(blocks[0].flags.iter().any(|f| f.starts_with("1 of 5 temperatures")));
    }
}
