//! `plot.render` and `plot.kinds`: figures of stored datasets, drawn by mobilis-plot.
//!
//! The daemon's part is small on purpose: find the dataset, keep the rows the client asked
//! for (`filter`), tell the plot crate which analysis made the dataset (its provenance) and
//! the figures the loaded analyses declare ([`Service::figure_catalog`]), and return the SVG
//! and the Vega-Lite specification. The daemon knows no figure of its own beyond `columns`.
//!
//! Figures are bounded before they are drawn: rows are grouped into series with one hash lookup
//! per row, and a figure of more than `mobilis_plot::MAX_SERIES` (200) series or of more than
//! [`MAX_PLOT_ROWS`] (2,000,000) rows after the filter is refused with 4009 (`resource_limit`)
//! naming `filter`. `filter` keeps rows equal to given values, temperatures and fields within
//! their setpoint's tolerance (so `{"field_T": 0.5}` keeps the rows at 0.4997 T that a legend
//! calls "0.5 T"), and the title says which; `series_by` names the columns whose values make
//! separate series.

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use crate::service::Service;
use crate::store::Provenance;
use mobilis_plot::{FigureCatalog, PlotError, PlotOptions};
use mobilis_protocol::results::{Figure, PlotKind};
use polars::prelude::*;
use serde_json::{Map, Value};

/// Which renderings a `plot.render` call returns.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Formats {
    Svg,
    VegaLite,
    Both,
}

/// The parameters of `plot.render` that are the daemon's, not the plot options.
const OWN_PARAMS: [&str; 3] = ["dataset", "filter", "format"];

/// The most rows one figure draws from (after `filter`). Drawing thins markers to a budget
/// per panel, but every row is still read, grouped and converted: past this the answer
/// would no longer come within a second.
pub const MAX_PLOT_ROWS: usize = 2_000_000;

fn plot_error(dataset: &str, error: PlotError) -> ServiceError {
    if let PlotError::TooLarge(_) = error {
        return ServiceError::new(ErrorKind::ResourceLimit, format!("plot of `{dataset}`: {error}"))
            .with_param("filter")
            .with_help("dataset.rows or report.samples show the values to filter on");
    }
    ServiceError::invalid_params(format!("plot of `{dataset}`: {error}"))
        .with_help("plot.kinds lists the kinds and the analyses whose outputs each one draws")
}

/// The analysis that produced a dataset, if it is an analysis's main output table.
fn producing_analysis(provenance: &Provenance) -> Option<String> {
    match provenance {
        Provenance::Analysis {
            analysis,
            summary: false,
            ..
        } => Some(analysis.clone()),
        _ => None,
    }
}

/// Keeps the rows whose `column` equals each given value (strings exactly, numbers to a
/// relative 1e-9, so that a temperature typed as 300 matches 300.0000000001; temperatures and
/// fields to their setpoint's tolerance, so that `field_T: 0.5` keeps the rows at 0.4997 T that
/// a figure names "0.5 T", see `mobilis_plot::matches_nominal`).
pub fn filter_rows(frame: &DataFrame, filter: &Map<String, Value>) -> ServiceResult<DataFrame> {
    if filter.is_empty() {
        return Ok(frame.clone());
    }
    let mut keep = vec![true; frame.height()];
    for (name, wanted) in filter {
        let column = frame.column(name).map_err(|_| {
            ServiceError::new(
                ErrorKind::ColumnProblem,
                format!("filter: the dataset has no column `{name}`"),
            )
            .with_help(format!(
                "its columns are: {}",
                frame
                    .get_column_names()
                    .iter()
                    .map(|c| c.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
        })?;
        let matches: Vec<bool> = match wanted {
            Value::String(text) => {
                let strings = column.str().map_err(|_| {
                    ServiceError::invalid_params(format!("filter: `{name}` is not a text column; give a number"))
                })?;
                strings.iter().map(|cell| cell == Some(text.as_str())).collect()
            }
            Value::Number(number) => {
                let target = number.as_f64().unwrap_or(f64::NAN);
                if !column.dtype().is_primitive_numeric() {
                    return Err(ServiceError::invalid_params(format!(
                        "filter: `{name}` is not numeric; give text"
                    )));
                }
                let numbers = column
                    .cast(&DataType::Float64)
                    .map_err(|_| ServiceError::invalid_params(format!("filter: `{name}` is not numeric; give text")))?;
                let numbers = numbers.f64().expect("cast to f64").clone();
                numbers
                    .iter()
                    .map(|cell| cell.is_some_and(|v| mobilis_plot::matches_nominal(name, v, target)))
                    .collect()
            }
            Value::Bool(flag) => {
                let flags = column
                    .bool()
                    .map_err(|_| ServiceError::invalid_params(format!("filter: `{name}` is not a boolean column")))?;
                flags.iter().map(|cell| cell == Some(*flag)).collect()
            }
            other => {
                return Err(ServiceError::invalid_params(format!(
                    "filter: `{name}` must be compared with a string, number or boolean, not {other}"
                )))
            }
        };
        for (slot, matched) in keep.iter_mut().zip(matches) {
            *slot &= matched;
        }
    }
    let mask = BooleanChunked::from_slice(PlSmallStr::from_static("keep"), &keep);
    frame
        .filter(&mask)
        .map_err(|e| ServiceError::new(ErrorKind::InvalidData, e.to_string()))
}

impl Service {
    /// The figures the loaded analyses declare: the only figures the daemon knows besides
    /// `columns`, so that a lab's plugin is drawn as the built-in ones are.
    pub fn figure_catalog(&self) -> FigureCatalog<'_> {
        let mut catalog = FigureCatalog::new();
        for (name, entry) in &self.host.analyses {
            catalog.add(name, &entry.declaration.figures);
        }
        catalog
    }

    /// Draws a dataset (see `plot.render` in the OpenRPC document).
    pub fn plot_render(&self, params: Map<String, Value>) -> ServiceResult<Figure> {
        let dataset_name = params
            .get("dataset")
            .and_then(Value::as_str)
            .ok_or_else(|| ServiceError::invalid_params("plot.render needs `dataset`: the name of a stored dataset"))?
            .to_owned();
        let filter = match params.get("filter") {
            None | Some(Value::Null) => Map::new(),
            Some(Value::Object(map)) => map.clone(),
            Some(_) => {
                return Err(ServiceError::invalid_params(
                    "filter must be an object {column: value}, for example {\"sample\": \"W1\"}",
                ))
            }
        };
        let formats = match params.get("format").and_then(Value::as_str) {
            None | Some("both") => Formats::Both,
            Some("svg") => Formats::Svg,
            Some("vega-lite") => Formats::VegaLite,
            Some(other) => {
                return Err(ServiceError::invalid_params(format!(
                    "format `{other}` is not known; use svg, vega-lite or both"
                )))
            }
        };
        let option_values: Map<String, Value> = params
            .into_iter()
            .filter(|(key, _)| !OWN_PARAMS.contains(&key.as_str()))
            .collect();
        let mut options: PlotOptions = serde_json::from_value(Value::Object(option_values)).map_err(|error| {
            ServiceError::invalid_params(format!("plot.render: {error}"))
                .with_help("see rpc.discover for the parameters of plot.render")
        })?;
        // The title names the rows kept, so that a figure of part of a dataset says so.
        options.selection = filter
            .iter()
            .map(|(column, value)| {
                let text = match value {
                    Value::String(text) => text.clone(),
                    other => other.to_string(),
                };
                (column.clone(), text)
            })
            .collect();
        let dataset = self.store.get(&dataset_name)?;
        if options.analysis.is_none() {
            options.analysis = producing_analysis(&dataset.manifest.provenance);
        }
        let frame = filter_rows(&dataset.frame, &filter)?;
        // Checked before anything is drawn, so that a refusal is as quick as the filter.
        if frame.height() > MAX_PLOT_ROWS {
            return Err(ServiceError::new(
                ErrorKind::ResourceLimit,
                format!(
                    "plot of `{dataset_name}`: {} rows are more than one figure draws ({MAX_PLOT_ROWS})",
                    frame.height()
                ),
            )
            .with_param("filter")
            .with_help("keep part of the rows with filter, for example {\"sample\": \"W1\"}, or export the dataset and draw it elsewhere"));
        }
        if frame.height() == 0 {
            let error = if dataset.frame.height() == 0 {
                ServiceError::new(
                    ErrorKind::InvalidData,
                    format!("dataset `{dataset_name}` has no rows to draw"),
                )
                .with_help("import or compute a dataset with rows, then draw it")
            } else {
                ServiceError::new(
                    ErrorKind::InvalidData,
                    format!("no rows of `{dataset_name}` match the filter"),
                )
                .with_help("check the filter's values with dataset.rows")
            };
            return Err(error);
        }
        let figure = mobilis_plot::build(&frame, &dataset_name, &options, &self.figure_catalog())
            .map_err(|e| plot_error(&dataset_name, e))?;
        Ok(Figure {
            kind: figure.kind().to_owned(),
            title: figure.title().to_owned(),
            svg: (formats != Formats::VegaLite).then(|| figure.to_svg()),
            vega_lite: (formats != Formats::Svg).then(|| figure.to_vega_lite()),
            dataset: dataset_name,
        })
    }

    /// The plot kinds; with a dataset, the kinds that apply to it.
    pub fn plot_kinds(&self, dataset: Option<&str>) -> ServiceResult<Vec<PlotKind>> {
        let describe = |kind: &mobilis_plot::KindInfo| PlotKind {
            name: kind.name.clone(),
            description: kind.description.clone(),
            analyses: kind.analyses.clone(),
        };
        let catalog = self.figure_catalog();
        match dataset {
            None => Ok(catalog.kinds().iter().map(describe).collect()),
            Some(name) => {
                let dataset = self.store.get(name)?;
                let analysis = producing_analysis(&dataset.manifest.provenance);
                // In the analysis's declared order, its default first.
                let kinds = catalog.kinds();
                Ok(catalog
                    .kinds_for(analysis.as_deref())
                    .iter()
                    .filter_map(|name| kinds.iter().find(|kind| &kind.name == name))
                    .map(describe)
                    .collect())
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn the_filter_keeps_rows_equal_to_each_value() {
        let frame = df!(
            "sample" => ["A", "B", "A", "A"],
            "temperature_K" => [2.0, 2.0, 300.0000000001, 77.0],
        )
        .unwrap();
        let filter: Map<String, Value> = serde_json::from_value(json!({"sample": "A", "temperature_K": 300})).unwrap();
        let kept = filter_rows(&frame, &filter).unwrap();
        assert_eq!(kept.height(), 1);
        // Fields and temperatures match their nominal value, as figures name them.
        let wandering = df!(
            "field_T" => [0.4997, 0.5002, 0.52, 1.0],
            "temperature_K" => [299.6, 300.3, 77.0, 302.0],
            "thickness_m" => [5e-7, 5.0000001e-7, 5e-7, 5e-7],
        )
        .unwrap();
        let filter: Map<String, Value> = serde_json::from_value(json!({"field_T": 0.5})).unwrap();
        assert_eq!(filter_rows(&wandering, &filter).unwrap().height(), 2);
        let filter: Map<String, Value> = serde_json::from_value(json!({"temperature_K": 300})).unwrap();
        assert_eq!(filter_rows(&wandering, &filter).unwrap().height(), 2);
        let filter: Map<String, Value> = serde_json::from_value(json!({"thickness_m": 5e-7})).unwrap();
        assert_eq!(filter_rows(&wandering, &filter).unwrap().height(), 3);
        let error = filter_rows(&frame, &serde_json::from_value(json!({"wafer": "A"})).unwrap()).unwrap_err();
        assert_eq!(error.kind, ErrorKind::ColumnProblem);
        assert!(error.help.unwrap().contains("sample, temperature_K"));
        let error = filter_rows(&frame, &serde_json::from_value(json!({"sample": 3})).unwrap()).unwrap_err();
        assert!(error.message.contains("not numeric"), "{}", error.message);
    }
}
