//! The two ways a figure is built (a plugin's declared figure, [`declared`], and the generic
//! `columns` figure, [`columns`]) and the shared reading of columns, series grouping and unit
//! conversion they use.
//!
//! Nothing here knows an analysis: what a table's columns mean and how they are drawn comes
//! from the declaration of the analysis that made it. Values enter the figure already in
//! displayed units (`crate::units`), so the renderers never convert.

pub(crate) mod columns;
pub(crate) mod declared;

use polars::prelude::*;

use crate::error::PlotError;
use crate::figure::{format_value, Panel, Point};
use crate::options::PlotOptions;
use crate::units::column_display;
use mobilis_sdk::figure_spec::SeriesKey;

/// What a builder returns: its panels and a default title.
pub(crate) struct Drawing {
    pub title: String,
    pub panels: Vec<Panel>,
}

/// The kind being drawn, as error messages name it: its name, the columns it draws and the
/// analyses whose tables it is declared for.
pub(crate) struct KindRef {
    pub name: String,
    pub needs: String,
    pub analyses: Vec<String>,
}

/// The error for a column `kind` needs and `dataset` lacks.
pub(crate) fn missing_column(kind: &KindRef, dataset: &str, column: &str, columns: &[String]) -> PlotError {
    let made_by = if kind.analyses.is_empty() {
        "any analysis or import".to_owned()
    } else {
        kind.analyses.join(" or ")
    };
    PlotError::MissingColumn {
        kind: kind.name.clone(),
        column: column.to_owned(),
        dataset: dataset.to_owned(),
        detail: format!(
            "kind `{}` draws {}; the dataset's columns are {}; such a dataset is made by {made_by}",
            kind.name,
            kind.needs,
            columns.join(", ")
        ),
    }
}

/// The most series (or panels) one figure draws; more are refused, naming the filter to use.
pub const MAX_SERIES: usize = 200;

/// A row set that becomes one series (or panel), with its label.
pub(crate) struct Group {
    pub label: String,
    pub rows: Vec<usize>,
}

/// What a recipe reads: the table, the options and who it is, for error messages.
pub(crate) struct Context<'a> {
    pub frame: &'a DataFrame,
    pub dataset: &'a str,
    pub options: &'a PlotOptions,
    pub kind: &'a KindRef,
}

impl Context<'_> {
    pub fn has(&self, name: &str) -> bool {
        self.frame.column(name).is_ok()
    }

    fn missing(&self, name: &str) -> PlotError {
        let mut columns: Vec<String> = self.frame.get_column_names().iter().map(|c| c.to_string()).collect();
        columns.sort();
        missing_column(self.kind, self.dataset, name, &columns)
    }

    /// A numeric column as f64 (nulls as NaN, which the figure skips).
    pub fn floats(&self, name: &str) -> Result<Vec<f64>, PlotError> {
        let column = self.frame.column(name).map_err(|_| self.missing(name))?;
        let numeric = column.dtype().is_primitive_numeric() || column.dtype().is_null() || column.dtype().is_bool();
        let cast = column
            .cast(&DataType::Float64)
            .ok()
            .filter(|_| numeric)
            .ok_or_else(|| PlotError::NotNumeric {
                column: name.to_owned(),
                dtype: column.dtype().to_string(),
            })?;
        Ok(cast
            .f64()
            .expect("cast to Float64")
            .iter()
            .map(|v| v.unwrap_or(f64::NAN))
            .collect())
    }

    /// A numeric column in displayed units.
    pub fn displayed(&self, name: &str) -> Result<Vec<f64>, PlotError> {
        let display = column_display(name);
        Ok(self
            .floats(name)?
            .into_iter()
            .map(|v| v * display.factor + display.offset)
            .collect())
    }

    /// A column as text (numbers formatted), nulls as None.
    pub fn texts(&self, name: &str) -> Result<Vec<Option<String>>, PlotError> {
        let column = self.frame.column(name).map_err(|_| self.missing(name))?;
        if column.dtype().is_primitive_numeric() {
            return Ok(self
                .floats(name)?
                .into_iter()
                .map(|v| v.is_finite().then(|| format_value(v)))
                .collect());
        }
        let cast = column.cast(&DataType::String).map_err(|_| PlotError::NotNumeric {
            column: name.to_owned(),
            dtype: column.dtype().to_string(),
        })?;
        Ok(cast
            .str()
            .expect("cast to String")
            .iter()
            .map(|v| v.map(str::to_owned))
            .collect())
    }

    /// A boolean column (absent: None; nulls as false).
    pub fn flags(&self, name: &str) -> Option<Vec<bool>> {
        let column = self.frame.column(name).ok()?;
        let cast = column.cast(&DataType::Boolean).ok()?;
        Some(cast.bool().ok()?.iter().map(|v| v.unwrap_or(false)).collect())
    }

    /// The `kind` column of a table with several row kinds, as the index of each row's kind
    /// among `names` (None for any other kind and for nulls), read once for a whole figure:
    /// an oscillation table holds a hundred thousand rows of five kinds.
    pub fn kind_codes(&self, names: &[&str]) -> Result<Vec<Option<usize>>, PlotError> {
        let code = |kind: Option<&str>| kind.and_then(|k| names.iter().position(|n| *n == k));
        if let Ok(strings) = self.frame.column("kind").and_then(|c| c.str()) {
            return Ok(strings.iter().map(code).collect());
        }
        Ok(self.texts("kind")?.iter().map(|k| code(k.as_deref())).collect())
    }

    /// Splits `rows` into series by `options.series_by`, or by the figure's `defaults` that
    /// are present and take more than one value among the rows (or are marked `always`).
    /// Temperatures and fields count by their nominal values ([`nominal_keys`]), other columns
    /// by their text.
    pub fn groups(&self, rows: &[usize], defaults: &[SeriesKey]) -> Result<Vec<Group>, PlotError> {
        let chosen_by_caller = self.options.series_by.is_some();
        let candidates: Vec<SeriesKey> = match &self.options.series_by {
            Some(columns) => {
                for column in columns {
                    if !self.has(column) {
                        return Err(PlotError::BadOption(format!(
                            "series_by names `{column}`, which dataset `{}` does not have; its columns are {}",
                            self.dataset,
                            self.frame
                                .get_column_names()
                                .iter()
                                .map(|c| c.to_string())
                                .collect::<Vec<_>>()
                                .join(", ")
                        )));
                    }
                }
                columns.iter().map(|c| SeriesKey::column(c)).collect()
            }
            None => defaults.iter().filter(|c| self.has(&c.column)).cloned().collect(),
        };
        let mut columns = Vec::new();
        let mut values: Vec<Vec<Option<String>>> = Vec::new();
        for column in candidates {
            let keys = self.group_keys(&column.column, rows)?;
            if !chosen_by_caller && !column.always {
                let varies = rows
                    .first()
                    .is_some_and(|&first| rows.iter().any(|&r| keys[r] != keys[first]));
                if !varies {
                    continue;
                }
            }
            columns.push(column);
            values.push(keys);
        }
        // One hash lookup per row: a search through the groups found so far made a million
        // rows in tens of thousands of series take minutes.
        let mut index_of: std::collections::HashMap<Vec<Option<&str>>, usize> = std::collections::HashMap::new();
        let mut groups: Vec<Group> = Vec::new();
        for &row in rows {
            let key: Vec<Option<&str>> = values.iter().map(|v| v[row].as_deref()).collect();
            if let Some(&index) = index_of.get(&key) {
                groups[index].rows.push(row);
                continue;
            }
            if groups.len() == MAX_SERIES {
                return Err(self.too_many_series(&columns));
            }
            let owned: Vec<Option<String>> = key.iter().map(|k| k.map(str::to_owned)).collect();
            index_of.insert(key, groups.len());
            groups.push(Group {
                label: self.group_label(&columns, &owned, row)?,
                rows: vec![row],
            });
        }
        Ok(groups)
    }

    /// The refusal of a figure with more than [`MAX_SERIES`] series, before anything is drawn.
    fn too_many_series(&self, columns: &[SeriesKey]) -> PlotError {
        let by = if columns.is_empty() {
            "its series".to_owned()
        } else {
            columns.iter().map(|c| c.column.as_str()).collect::<Vec<_>>().join(", ")
        };
        PlotError::TooLarge(format!(
            "dataset `{}` would draw more than {MAX_SERIES} series (one per value of {by}), too many to read or to draw in time; keep part of the rows with filter, for example {{\"sample\": \"W1\"}}, or choose series_by with fewer values (series_by: [] draws one series)",
            self.dataset
        ))
    }

    /// The grouping key of every row of the table (None outside `rows` and for nulls): the
    /// nominal value of a numeric temperature or field, the text of anything else.
    fn group_keys(&self, column: &str, rows: &[usize]) -> Result<Vec<Option<String>>, PlotError> {
        let setpoint = match column {
            "temperature_K" => Some(Setpoint::Temperature),
            "field_T" => Some(Setpoint::Field),
            _ => None,
        };
        let numeric = self
            .frame
            .column(column)
            .is_ok_and(|c| c.dtype().is_primitive_numeric());
        match setpoint {
            Some(setpoint) if numeric => Ok(nominal_keys(&self.floats(column)?, rows, setpoint)),
            _ => self.texts(column),
        }
    }
}

/// The quantities whose measured values scatter around a setpoint.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Setpoint {
    Temperature,
    Field,
}

/// Width of a field setpoint, T: the default `field_tolerance_T` of `hall.reduce`, which cuts
/// the readings of one setpoint into a row the same way.
pub(crate) const FIELD_SETPOINT_T: f64 = 5e-3;

/// The nominal value of each of `rows` (indexed by row, None elsewhere and for non-finite
/// values), as the label text of a series.
///
/// The values are sorted and cut into setpoints as the analyses cut them: temperatures where
/// two consecutive values are further apart than `mr.*`'s and `spectrum.*`'s default sweep
/// grouping allows (the larger of 0.05 K and 0.5 % of T, `TemperatureGrouping`), fields into
/// runs no wider than [`FIELD_SETPOINT_T`] from their smallest value. Each setpoint is named
/// by the roundest number within half that tolerance of its mean ([`roundest`]): a sample
/// measured at 0.4997-0.5002 T is one series "0.5 T", not ten series of exact means.
pub(crate) fn nominal_keys(values: &[f64], rows: &[usize], setpoint: Setpoint) -> Vec<Option<String>> {
    let grouping = mobilis_physics::sweep::TemperatureGrouping::default();
    let mut sorted: Vec<(f64, usize)> = rows
        .iter()
        .filter(|&&r| values[r].is_finite())
        .map(|&r| (values[r], r))
        .collect();
    sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut keys = vec![None; values.len()];
    let mut start = 0;
    while start < sorted.len() {
        let mut end = start + 1;
        while end < sorted.len() {
            let joins = match setpoint {
                Setpoint::Temperature => sorted[end].0 - sorted[end - 1].0 <= grouping.allowed_gap_k(sorted[end - 1].0),
                Setpoint::Field => sorted[end].0 - sorted[start].0 <= FIELD_SETPOINT_T,
            };
            if !joins {
                break;
            }
            end += 1;
        }
        let cluster = &sorted[start..end];
        let mean = cluster.iter().map(|(v, _)| v).sum::<f64>() / cluster.len() as f64;
        let tolerance = match setpoint {
            Setpoint::Temperature => grouping.allowed_gap_k(mean),
            Setpoint::Field => FIELD_SETPOINT_T,
        };
        let label = format_value(roundest(mean, 0.5 * tolerance));
        for &(_, row) in cluster {
            keys[row] = Some(label.clone());
        }
        start = end;
    }
    keys
}

/// The number with the fewest significant digits (a multiple of the largest power of ten)
/// within `tolerance` of `value`: 0.49996 with 2.5e-3 gives 0.5, 77.31 with 0.19 gives 77.3.
pub(crate) fn roundest(value: f64, tolerance: f64) -> f64 {
    if !(tolerance > 0.0 && value.is_finite()) {
        return value;
    }
    let mut step = 10f64.powf((value.abs() + tolerance).log10().ceil());
    while step >= tolerance * 1e-3 {
        let candidate = (value / step).round() * step;
        if (candidate - value).abs() <= tolerance {
            return if candidate == 0.0 { 0.0 } else { candidate };
        }
        step /= 10.0;
    }
    value
}

impl Context<'_> {
    /// "A, 300 K, 0.5 T": sample names as they are, quantities with their unit, a key's
    /// prefix before its value; an `exact` key shows the value of the group's `first` row.
    fn group_label(&self, columns: &[SeriesKey], key: &[Option<String>], first: usize) -> Result<String, PlotError> {
        let mut parts: Vec<String> = Vec::new();
        for (column, value) in columns.iter().zip(key) {
            let mut value = value.clone().unwrap_or_else(|| "none".to_owned());
            if column.exact {
                if let Some(exact) = self.floats(&column.column)?.get(first).filter(|v| v.is_finite()) {
                    value = format_value(*exact);
                }
            }
            let text = match column.column.as_str() {
                "sample" => value,
                "temperature_K" => format!("{value} K"),
                "field_T" => format!("{value} T"),
                other => format!("{other} = {value}"),
            };
            parts.push(format!("{}{text}", column.prefix));
        }
        Ok(parts.join(", "))
    }
}

/// Points at `rows` from displayed x and y (and optional y errors).
pub(crate) fn points(rows: &[usize], x: &[f64], y: &[f64], y_err: Option<&[f64]>) -> Vec<Point> {
    rows.iter()
        .map(|&r| Point::new(x[r], y[r]).with_y_err(y_err.map(|e| e[r])))
        .collect()
}

/// A series name within a group: "A: fit", or just "fit" when there is one group.
pub(crate) fn named(group: &Group, groups: usize, what: &str) -> String {
    if groups <= 1 || group.label.is_empty() {
        what.to_owned()
    } else {
        format!("{}: {what}", group.label)
    }
}

/// All rows of the table.
pub(crate) fn all_rows(frame: &DataFrame) -> Vec<usize> {
    (0..frame.height()).collect()
}
