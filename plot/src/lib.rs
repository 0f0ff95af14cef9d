//! Figures of mobilis datasets: one figure model, drawn as SVG in Rust and written as the
//! same figure in Vega-Lite for notebooks that render it interactively.
//!
//! [`build`] turns a dataset (a polars DataFrame in SI units, columns named as the plugins
//! write them) into a [`Figure`] of a "kind": one of the figures the analysis that made the
//! dataset declares ([`FigureSpec`], in its plugin's declaration, gathered in a
//! [`FigureCatalog`]), or `columns` for anything else. The crate knows no analysis: a lab's own
//! plugin that declares its figures gets them drawn as the built-in plugins' are. Axes are in
//! the customary units the column names imply (cm^-3, cm^2/(V s), ohm cm, T, K, 1000/T),
//! logarithmic where the declaration says, and uncertainty columns (`_unc`, one sigma) become
//! error bars.
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
use mobilis_sdk::figure_spec::FigureSpec;
pub use options::PlotOptions;
pub use recipes::MAX_SERIES;
pub use svg::escape;

/// A plot kind as listed to clients.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct KindInfo {
    pub name: String,
    pub description: String,
    /// The analyses that declare the kind for their output; empty for `columns`, which draws
    /// any table.
    pub analyses: Vec<String>,
}

/// The generic figure every table gets.
pub const COLUMNS: &str = "columns";

const COLUMNS_DESCRIPTION: &str = "Any dataset: the columns `y` against `x`, one series per combination of `series_by`, with error bars from `y_error` or the columns' `_unc` companions; axes in the units of the trade.";

/// The figures the loaded analyses declare, by analysis: what [`build`] can draw besides
/// `columns`. The daemon fills it from the plugins' declarations, so that the host knows no
/// analysis's figures of its own.
#[derive(Debug, Clone, Default)]
pub struct FigureCatalog<'a> {
    /// (analysis, its figures in declared order), in the order added.
    analyses: Vec<(&'a str, &'a [FigureSpec])>,
}

impl<'a> FigureCatalog<'a> {
    pub fn new() -> Self {
        FigureCatalog::default()
    }

    /// Adds the figures `analysis` declares (its default first).
    pub fn add(&mut self, analysis: &'a str, figures: &'a [FigureSpec]) {
        self.analyses.push((analysis, figures));
    }

    /// The figure `kind` as `analysis` declares it, else as the first analysis declaring it
    /// does, with the analyses that declare a figure of that name.
    fn find(&self, kind: &str, analysis: Option<&str>) -> Option<(&'a FigureSpec, Vec<String>)> {
        let declaring: Vec<(&'a str, &'a FigureSpec)> = self
            .analyses
            .iter()
            .filter_map(|(name, figures)| figures.iter().find(|f| f.name == kind).map(|f| (*name, f)))
            .collect();
        let spec = declaring
            .iter()
            .find(|(name, _)| Some(*name) == analysis)
            .or(declaring.first())
            .map(|(_, spec)| *spec)?;
        Some((spec, declaring.iter().map(|(name, _)| (*name).to_owned()).collect()))
    }

    /// Every kind, `columns` first, then the declared figures in the order of their first
    /// declaration.
    pub fn kinds(&self) -> Vec<KindInfo> {
        let mut kinds = vec![KindInfo {
            name: COLUMNS.to_owned(),
            description: COLUMNS_DESCRIPTION.to_owned(),
            analyses: Vec::new(),
        }];
        for (analysis, figures) in &self.analyses {
            for figure in figures.iter() {
                match kinds.iter_mut().find(|k| k.name == figure.name) {
                    Some(kind) => {
                        if !kind.analyses.iter().any(|a| a == analysis) {
                            kind.analyses.push((*analysis).to_owned());
                        }
                    }
                    None => kinds.push(KindInfo {
                        name: figure.name.clone(),
                        description: figure.description.clone(),
                        analyses: vec![(*analysis).to_owned()],
                    }),
                }
            }
        }
        kinds
    }

    /// The kinds that draw a dataset made by `analysis`, its default first: all the plots of
    /// the dataset for a report. Imported data, and analyses that declare no figure, get
    /// `columns`.
    pub fn kinds_for(&self, analysis: Option<&str>) -> Vec<String> {
        let found: Vec<String> = match analysis {
            Some(analysis) => self
                .analyses
                .iter()
                .filter(|(name, _)| *name == analysis)
                .flat_map(|(_, figures)| figures.iter().map(|f| f.name.clone()))
                .collect(),
            None => Vec::new(),
        };
        if found.is_empty() {
            vec![COLUMNS.to_owned()]
        } else {
            found
        }
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
/// for, from the figures `catalog` declares (or the generic `columns` figure).
pub fn build(
    frame: &DataFrame,
    dataset: &str,
    options: &PlotOptions,
    catalog: &FigureCatalog,
) -> Result<Figure, PlotError> {
    size("width", options.width, DEFAULT_WIDTH)?;
    size("height", options.height, DEFAULT_HEIGHT)?;
    let default_kind;
    let kind = match options.kind.as_deref().map(str::trim) {
        None | Some("") | Some("auto") => {
            default_kind = catalog.kinds_for(options.analysis.as_deref()).remove(0);
            default_kind.as_str()
        }
        Some(kind) => kind,
    };
    let declared = if kind == COLUMNS {
        None
    } else {
        Some(catalog.find(kind, options.analysis.as_deref()).ok_or_else(|| {
            PlotError::UnknownKind {
                kind: kind.to_owned(),
                known: std::iter::once("auto".to_owned())
                    .chain(catalog.kinds().into_iter().map(|k| k.name))
                    .collect::<Vec<_>>()
                    .join(", "),
            }
        })?)
    };
    let kind_ref = match &declared {
        None => recipes::KindRef {
            name: COLUMNS.to_owned(),
            needs: "the columns named by x and y".to_owned(),
            analyses: Vec::new(),
        },
        Some((spec, analyses)) => recipes::KindRef {
            name: spec.name.clone(),
            needs: needs_text(spec),
            analyses: analyses.clone(),
        },
    };
    if declared.is_some() && (options.x.is_some() || !options.y.is_empty()) {
        return Err(PlotError::BadOption(format!(
            "x and y choose the columns of kind `columns`; kind `{kind}` draws fixed columns ({}); leave x and y out or ask for kind `columns`",
            kind_ref.needs
        )));
    }
    let context = recipes::Context {
        frame,
        dataset,
        options,
        kind: &kind_ref,
    };
    let drawing = match &declared {
        None => recipes::columns::build(&context)?,
        Some((spec, _)) => recipes::declared::build(&context, spec)?,
    };
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
        kind: kind_ref.name.clone(),
        title,
        panels,
        panel_width: width,
        panel_height: height,
    };
    if !figure.finish() {
        // Say why: no finite value at all (the columns are null, so the log axes are not
        // to blame), or finite values that only a log axis dropped.
        let any_finite = figure
            .panels
            .iter()
            .flat_map(|panel| &panel.series)
            .flat_map(|series| &series.points)
            .any(|point| point.x.is_finite() && point.y.is_finite());
        let hint = if !any_finite {
            "; the values it draws are null or not finite in every row (see which columns with dataset.rows)".to_owned()
        } else if options.log_x == Some(true)
            || options.log_y == Some(true)
            || figure.panels.iter().any(|p| p.x.log || p.y.log)
        {
            "; a log axis drops values at or below zero (set log_x or log_y to false)".to_owned()
        } else {
            String::new()
        };
        return Err(PlotError::NoFinitePoints {
            dataset: dataset.to_owned(),
            kind: kind_ref.name.clone(),
            hint,
        });
    }
    Ok(figure)
}

/// "temperature_K and density_m3 (or sheet_density_m2)": the columns a declared figure draws,
/// for messages.
fn needs_text(spec: &FigureSpec) -> String {
    let join = |columns: Vec<String>| match columns.split_last() {
        None => "its declared columns".to_owned(),
        Some((last, [])) => last.clone(),
        Some((last, rest)) => format!("{} and {last}", rest.join(", ")),
    };
    let mut text = join(spec.needed_columns());
    let mut fallback = spec.fallback.as_deref();
    while let Some(other) = fallback {
        if let Some(layer) = other.panels.first().and_then(|p| p.layers.first()) {
            text.push_str(&format!(" (or {})", layer.y));
        }
        fallback = other.fallback.as_deref();
    }
    text
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
