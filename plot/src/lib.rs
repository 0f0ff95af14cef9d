//! Figures of mobilis datasets: one figure model, drawn as SVG in Rust and written as the
//! same figure in Vega-Lite for notebooks that render it interactively.
//!
//! [`build`] turns a dataset (a polars DataFrame in SI units, columns named as the plugins
//! write them) into a [`Figure`] by a recipe, a "kind": the plots the trade draws from each
//! analysis's output (carrier density against temperature, the Arrhenius plot, the mobility
//! spectrum, the Kohler plot, ...) or `columns` for anything else. Axes are in the customary
//! units (cm^-3, cm^2/(V s), ohm cm, T, K, 1000/T), logarithmic where the trade draws them so,
//! and uncertainty columns (`_unc`, one sigma) become error bars.
//!
//! The SVG is written here rather than by a plotting crate: the figures are few and
//! specific, a dependency would bring its own fonts and rasterizers, and the renderer is small
//! enough to test element by element. The crate knows nothing of JSON-RPC, the store or
//! files; callers pass a frame and get text or JSON back.

mod error;
mod figure;
mod options;
mod recipes;
mod svg;
mod units;
mod vega;

#[cfg(test)]
mod tests;

use polars::prelude::DataFrame;

pub use error::PlotError;
pub use figure::Figure;
pub use options::PlotOptions;
pub use recipes::MAX_SERIES;

/// A recipe as listed to clients.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct KindInfo {
    pub name: &'static str,
    pub description: &'static str,
    /// The analyses whose output the recipe draws; empty for `columns`, which draws any.
    pub analyses: &'static [&'static str],
}

static KINDS: std::sync::OnceLock<Vec<KindInfo>> = std::sync::OnceLock::new();

/// Every recipe, `columns` first.
pub fn kinds() -> &'static [KindInfo] {
    KINDS.get_or_init(|| {
        recipes::RECIPES
            .iter()
            .map(|r| KindInfo {
                name: r.name,
                description: r.description,
                analyses: r.analyses,
            })
            .collect()
    })
}

/// The recipes that draw a dataset made by `analysis`, its default first: all the plots of
/// the dataset for a report. Imported data, and analyses without a recipe, get `columns`.
pub fn kinds_for(analysis: Option<&str>) -> Vec<&'static str> {
    let found: Vec<&'static str> = match analysis {
        Some(analysis) => recipes::RECIPES
            .iter()
            .filter(|r| r.analyses.contains(&analysis))
            .map(|r| r.name)
            .collect(),
        None => Vec::new(),
    };
    if found.is_empty() {
        vec!["columns"]
    } else {
        found
    }
}

const DEFAULT_WIDTH: f64 = 640.0;
const DEFAULT_HEIGHT: f64 = 420.0;
/// The panel size of figures of several panels: two side by side make 1000 px, the width a
/// report gives them, so that their text is drawn at its own size.
const DEFAULT_MULTI_WIDTH: f64 = 500.0;
const DEFAULT_MULTI_HEIGHT: f64 = 400.0;

fn size(name: &str, value: Option<f64>, default: f64) -> Result<f64, PlotError> {
    match value {
        None => Ok(default),
        Some(v) if v.is_finite() && (160.0..=4000.0).contains(&v) => Ok(v),
        Some(v) => Err(PlotError::BadOption(format!(
            "{name} {v} is out of range; give a panel {name} from 160 to 4000 pixels (default {default})"
        ))),
    }
}

/// Whether a stored `value` of `column` is the nominal `target` a person typed: within a
/// setpoint's tolerance for `temperature_K` (the sweep grouping's gap at the target, the larger
/// of 0.05 K and 0.5 % of T) and `field_T` (5 mT), the widths that name series "300 K" or
/// "0.5 T"; to a relative 1e-9 for any other column, so that 300 matches 300.0000000001.
pub fn matches_nominal(column: &str, value: f64, target: f64) -> bool {
    let tolerance = match column {
        "temperature_K" => mobilis_physics::sweep::TemperatureGrouping::default().allowed_gap_k(target),
        "field_T" => recipes::FIELD_SETPOINT_T,
        _ => 1e-9 * target.abs().max(1e-300),
    };
    (value - target).abs() <= tolerance
}

/// "sample = W1, temperature = 300 K": the kept rows as a reader names them, quantities by
/// their name and displayed unit; None without a selection.
fn selection_text(selection: &[(String, String)]) -> Option<String> {
    if selection.is_empty() {
        return None;
    }
    let parts: Vec<String> = selection
        .iter()
        .map(|(column, value)| {
            let display = units::column_display(column);
            let number = value.trim().parse::<f64>().ok().filter(|v| v.is_finite());
            match (number, &display.unit) {
                (Some(number), Some(unit)) => format!(
                    "{} = {} {unit}",
                    display.name,
                    figure::format_value(number * display.factor + display.offset)
                ),
                _ => format!("{column} = {value}"),
            }
        })
        .collect();
    Some(parts.join(", "))
}

/// Builds the figure of `frame` (named `dataset` in titles and messages) that `options` ask
/// for.
pub fn build(frame: &DataFrame, dataset: &str, options: &PlotOptions) -> Result<Figure, PlotError> {
    size("width", options.width, DEFAULT_WIDTH)?;
    size("height", options.height, DEFAULT_HEIGHT)?;
    let kind = match options.kind.as_deref().map(str::trim) {
        None | Some("") | Some("auto") => kinds_for(options.analysis.as_deref())[0],
        Some(kind) => kind,
    };
    let recipe = recipes::find(kind).ok_or_else(|| PlotError::UnknownKind {
        kind: kind.to_owned(),
        known: std::iter::once("auto")
            .chain(recipes::RECIPES.iter().map(|r| r.name))
            .collect::<Vec<_>>()
            .join(", "),
    })?;
    if kind != "columns" && (options.x.is_some() || !options.y.is_empty()) {
        return Err(PlotError::BadOption(format!(
            "x and y choose the columns of kind `columns`; kind `{kind}` draws fixed columns ({}); leave x and y out or ask for kind `columns`",
            recipe.needs
        )));
    }
    let context = recipes::Context {
        frame,
        dataset,
        options,
        recipe,
    };
    let drawing = (recipe.build)(&context)?;
    let (default_width, default_height) = if drawing.panels.len() > 1 {
        (DEFAULT_MULTI_WIDTH, DEFAULT_MULTI_HEIGHT)
    } else {
        (DEFAULT_WIDTH, DEFAULT_HEIGHT)
    };
    let width = size("width", options.width, default_width)?;
    let height = size("height", options.height, default_height)?;
    let mut panels = drawing.panels;
    for panel in &mut panels {
        if let Some(log) = options.log_x {
            panel.x.log = log;
        }
        if let Some(log) = options.log_y {
            panel.y.log = log;
        }
    }
    let mut title = match &options.title {
        Some(title) if !title.trim().is_empty() => title.clone(),
        _ => format!("{} — {dataset}", drawing.title),
    };
    if let Some(selection) = selection_text(&options.selection) {
        title = format!("{title} ({selection})");
    }
    let mut figure = Figure {
        kind: recipe.name.to_owned(),
        title,
        panels,
        panel_width: width,
        panel_height: height,
    };
    if !figure.finish() {
        let hint = if options.log_x == Some(true)
            || options.log_y == Some(true)
            || figure.panels.iter().any(|p| p.x.log || p.y.log)
        {
            "; a log axis drops values at or below zero (set log_x or log_y to false)".to_owned()
        } else {
            String::new()
        };
        return Err(PlotError::NoFinitePoints {
            dataset: dataset.to_owned(),
            kind: recipe.name.to_owned(),
            hint,
        });
    }
    Ok(figure)
}

impl Figure {
    /// The figure as a standalone SVG document.
    pub fn to_svg(&self) -> String {
        svg::render(self)
    }

    /// The figure as a Vega-Lite v5 specification with the data inline.
    pub fn to_vega_lite(&self) -> serde_json::Value {
        vega::render(self)
    }
}
