//! The group splitting of a run: the rows of each group of the first input, the rows of
//! the other inputs with the same key, and the per-group summaries gathered into one table.

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use crate::tables;
use mobilis_protocol::results::GroupedSummary;
use polars::prelude::*;
use serde_json::{json, Value};
use std::collections::HashMap;

/// A run's summary: the analysis's own, or one per group when the run has group_by.
#[derive(Debug, Clone, PartialEq)]
pub enum RunSummary {
    Single(Value),
    Grouped(GroupedSummary),
}

impl RunSummary {
    /// The summary as `analysis.run` answers it and the output's provenance keeps it.
    pub fn to_value(&self) -> Value {
        match self {
            RunSummary::Single(summary) => summary.clone(),
            RunSummary::Grouped(grouped) => serde_json::to_value(grouped).expect("a grouped summary serialises"),
        }
    }
}

/// The scalar values of a summary as a table: one row per group (`group_columns` first) or
/// a single row. Numbers become f64 columns, booleans and strings keep their type, nested
/// objects and lists are kept as JSON text; a key missing from a group is null.
pub fn summary_table(summary: &RunSummary, group_columns: &[String]) -> ServiceResult<DataFrame> {
    let rows: Vec<(serde_json::Map<String, Value>, &Value)> = match summary {
        RunSummary::Single(summary) => vec![(serde_json::Map::new(), summary)],
        RunSummary::Grouped(grouped) => grouped.groups.iter().map(|g| (g.group.clone(), &g.summary)).collect(),
    };
    let mut names: Vec<String> = group_columns.to_vec();
    for (_, values) in &rows {
        for key in values.as_object().into_iter().flat_map(|m| m.keys()) {
            if !names.contains(key) {
                names.push(key.clone());
            }
        }
    }
    if rows.is_empty() || names.is_empty() {
        return Err(ServiceError::new(
            ErrorKind::InvalidData,
            "the analysis returned an empty summary; there is nothing to store",
        ));
    }
    let columns: serde_json::Map<String, Value> = names
        .iter()
        .map(|name| {
            let cells: Vec<Value> = rows
                .iter()
                .map(|(group, values)| {
                    group
                        .get(name)
                        .or_else(|| values.get(name))
                        .cloned()
                        .unwrap_or(Value::Null)
                })
                .collect();
            let uniform = cells.iter().filter(|v| !v.is_null()).all(|v| v.is_number())
                || cells.iter().filter(|v| !v.is_null()).all(|v| v.is_string())
                || cells.iter().filter(|v| !v.is_null()).all(|v| v.is_boolean());
            let cells = if uniform {
                cells
                    .into_iter()
                    .map(|v| match v {
                        Value::Number(n) => json!(n.as_f64()),
                        other => other,
                    })
                    .collect()
            } else {
                cells
                    .into_iter()
                    .map(|v| if v.is_null() { v } else { Value::String(v.to_string()) })
                    .collect()
            };
            (name.clone(), Value::Array(cells))
        })
        .collect();
    tables::frame_from_json_columns(&columns)
}

/// One group of a run: its key (a value per group_by column), the range of values a
/// column grouped with a tolerance spans in it, and its rows of the first input.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Group {
    /// The exact value of each column; for a column grouped with a tolerance, the mean of
    /// the group's values (what the output's column and the group's summary show).
    pub key: Vec<AnyValue<'static>>,
    /// For a column grouped with a tolerance, the lowest and highest value in the group.
    pub spans: Vec<Option<(f64, f64)>>,
    pub rows: Vec<IdxSize>,
}

impl Group {
    /// `column=value` for each group column, as warnings and errors name the group; a
    /// column grouped with a tolerance also shows the span of its values.
    pub fn label(&self, columns: &[String]) -> String {
        let parts: Vec<String> = columns
            .iter()
            .zip(&self.key)
            .zip(&self.spans)
            .map(|((column, value), span)| match (value, span) {
                (AnyValue::Float64(mean), Some((low, high))) if low < high => format!(
                    "{column}={} ({} to {})",
                    format_number(*mean),
                    format_number(*low),
                    format_number(*high)
                ),
                (AnyValue::Float64(mean), Some(_)) => format!("{column}={}", format_number(*mean)),
                _ => format!("{column}={value}"),
            })
            .collect();
        parts.join(", ")
    }
}

/// Four significant digits, trailing zeros dropped: a group's mean of logged values needs
/// no more to be named.
fn format_number(value: f64) -> String {
    format!("{value:.3e}")
        .parse::<f64>()
        .map_or_else(|_| value.to_string(), |short| short.to_string())
}

/// The values of one group column: exact values, or (with a tolerance) the index of the
/// cluster of sorted values each row falls in, with each cluster's mean and span.
enum ColumnGrouping {
    Exact(Series),
    Clustered {
        cluster_of_row: Vec<Option<usize>>,
        clusters: Vec<Cluster>,
    },
}

#[derive(Debug, Clone, Copy)]
struct Cluster {
    mean: f64,
    low: f64,
    high: f64,
}

/// Splits a numeric column's sorted values where two neighbours lie more than `tolerance`
/// apart: a temperature logged around its setpoint stays one group however it jitters.
/// Null and not-finite values are in no cluster (a group of their own, keyed null).
fn cluster_values(values: &[Option<f64>], tolerance: f64) -> (Vec<Option<usize>>, Vec<Cluster>) {
    let mut sorted: Vec<f64> = values.iter().flatten().copied().filter(|v| v.is_finite()).collect();
    sorted.sort_unstable_by(f64::total_cmp);
    // The first value of each cluster, in increasing order, and the clusters themselves.
    let mut starts: Vec<f64> = Vec::new();
    let mut clusters: Vec<Cluster> = Vec::new();
    let mut sum = 0.0;
    let mut count = 0usize;
    for (index, &value) in sorted.iter().enumerate() {
        if index > 0 && value - sorted[index - 1] > tolerance {
            let last = clusters.last_mut().expect("a cluster is open");
            last.mean = sum / count as f64;
            sum = 0.0;
            count = 0;
        }
        if index == 0 || value - sorted[index - 1] > tolerance {
            starts.push(value);
            clusters.push(Cluster {
                mean: value,
                low: value,
                high: value,
            });
        }
        let last = clusters.last_mut().expect("a cluster is open");
        last.high = value;
        sum += value;
        count += 1;
    }
    if let Some(last) = clusters.last_mut() {
        last.mean = sum / count as f64;
    }
    let cluster_of_row = values
        .iter()
        .map(|value| {
            value
                .filter(|v| v.is_finite())
                .map(|v| starts.partition_point(|&start| start <= v) - 1)
        })
        .collect();
    (cluster_of_row, clusters)
}

/// The groups of the first input, in order of first appearance. `tolerances` holds, for
/// each group column, the widest gap between sorted values that stays within one group
/// (`group_tolerance`), or `None` for grouping by exact values.
pub(super) fn group_rows(
    frame: &DataFrame,
    columns: &[String],
    tolerances: &[Option<f64>],
) -> ServiceResult<Vec<Group>> {
    let groupings: Vec<ColumnGrouping> = columns
        .iter()
        .zip(tolerances)
        .map(|(name, tolerance)| {
            let series = frame
                .column(name)
                .map(|c| c.as_materialized_series().clone())
                .map_err(|_| {
                    let present: Vec<&str> = frame.get_column_names().iter().map(|c| c.as_str()).collect();
                    ServiceError::new(
                        ErrorKind::ColumnProblem,
                        format!("group_by column `{name}` is not in the first input table"),
                    )
                    .with_help(format!("its columns are: {}", present.join(", ")))
                    .with_param("group_by")
                })?;
            let Some(tolerance) = tolerance else {
                return Ok(ColumnGrouping::Exact(series));
            };
            if !series.dtype().is_primitive_numeric() {
                return Err(ServiceError::new(
                    ErrorKind::ColumnProblem,
                    format!(
                        "group_tolerance applies to numeric columns, and `{name}` holds {}",
                        series.dtype()
                    ),
                )
                .with_help(format!(
                    "group `{name}` by its exact values (leave it out of group_tolerance)"
                ))
                .with_param("group_tolerance"));
            }
            let values = series
                .cast(&DataType::Float64)
                .map_err(|e| ServiceError::new(ErrorKind::ColumnProblem, e.to_string()))?;
            let values: Vec<Option<f64>> = values.f64().expect("cast to f64").iter().collect();
            let (cluster_of_row, clusters) = cluster_values(&values, *tolerance);
            Ok(ColumnGrouping::Clustered {
                cluster_of_row,
                clusters,
            })
        })
        .collect::<ServiceResult<_>>()?;
    let mut order: Vec<Group> = Vec::new();
    let mut index_of: HashMap<String, usize> = HashMap::new();
    for row in 0..frame.height() {
        let mut key: Vec<AnyValue<'static>> = Vec::with_capacity(groupings.len());
        let mut spans = Vec::with_capacity(groupings.len());
        let mut text = String::new();
        for grouping in &groupings {
            match grouping {
                ColumnGrouping::Exact(series) => {
                    let value = series.get(row).expect("row in range").into_static();
                    text.push_str(&format!("{value:?}|"));
                    key.push(value);
                    spans.push(None);
                }
                ColumnGrouping::Clustered {
                    cluster_of_row,
                    clusters,
                } => match cluster_of_row[row] {
                    Some(index) => {
                        let cluster = clusters[index];
                        text.push_str(&format!("cluster {index}|"));
                        key.push(AnyValue::Float64(cluster.mean));
                        spans.push(Some((cluster.low, cluster.high)));
                    }
                    None => {
                        text.push_str("null|");
                        key.push(AnyValue::Null);
                        spans.push(None);
                    }
                },
            }
        }
        match index_of.get(&text) {
            Some(&position) => order[position].rows.push(row as IdxSize),
            None => {
                index_of.insert(text, order.len());
                order.push(Group {
                    key,
                    spans,
                    rows: vec![row as IdxSize],
                });
            }
        }
    }
    Ok(order)
}

/// Another input's share of each group: its rows whose group columns hold a group's key.
/// A column grouped exactly must hold the group's value; a column grouped with a tolerance,
/// a value within the tolerance of the group's span. Each row's values are read once when
/// the matcher is made, so that matching a run's groups against the input costs one
/// comparison per row and group instead of a read (and a cast) of every row per group.
pub(super) struct GroupMatcher {
    /// Per group column: each row's value, as the exact comparison reads it.
    exact: Vec<Vec<AnyValue<'static>>>,
    /// Per group column grouped with a tolerance: each row's value as a float (`None` for a
    /// null or a value that is not a number).
    numbers: Vec<Option<Vec<Option<f64>>>>,
    tolerances: Vec<Option<f64>>,
    height: usize,
}

impl GroupMatcher {
    pub(super) fn new(frame: &DataFrame, columns: &[String], tolerances: &[Option<f64>]) -> Self {
        let series: Vec<&Series> = columns
            .iter()
            .map(|name| frame.column(name).expect("checked").as_materialized_series())
            .collect();
        let numbers = series
            .iter()
            .zip(tolerances)
            .map(|(s, tolerance)| {
                tolerance
                    .and_then(|_| s.cast(&DataType::Float64).ok())
                    .and_then(|cast| cast.f64().ok().map(|values| values.iter().collect()))
            })
            .collect();
        // Every column's exact values: a tolerance column's too, for its group of nulls.
        let exact = series
            .iter()
            .map(|s| s.iter().map(|value| value.into_static()).collect())
            .collect();
        GroupMatcher {
            exact,
            numbers,
            tolerances: tolerances.to_vec(),
            height: frame.height(),
        }
    }

    /// The rows of `group`, in row order.
    pub(super) fn rows_of(&self, group: &Group) -> Vec<IdxSize> {
        (0..self.height)
            .filter(|&row| {
                (0..self.tolerances.len()).all(|column| {
                    match (&self.numbers[column], group.spans[column], self.tolerances[column]) {
                        (Some(values), Some((low, high)), Some(tolerance)) => {
                            values[row].is_some_and(|value| value >= low - tolerance && value <= high + tolerance)
                        }
                        _ => self.exact[column]
                            .get(row)
                            .is_some_and(|value| *value == group.key[column]),
                    }
                })
            })
            .map(|row| row as IdxSize)
            .collect()
    }
}

/// Rows of `frame` that belong to `group` (see [`GroupMatcher`], which a run of many
/// groups makes once per input).
#[cfg(test)]
pub(super) fn rows_matching(
    frame: &DataFrame,
    columns: &[String],
    tolerances: &[Option<f64>],
    group: &Group,
) -> Vec<IdxSize> {
    GroupMatcher::new(frame, columns, tolerances).rows_of(group)
}

/// Whether a grouping looks like exact values of a logged, jittering quantity: a float
/// column grouped exactly, and most groups a single row.
pub(super) fn looks_jittery(
    frame: &DataFrame,
    columns: &[String],
    tolerances: &[Option<f64>],
    groups: &[Group],
) -> Option<String> {
    let singles = groups.iter().filter(|group| group.rows.len() == 1).count();
    if groups.len() < 4 || 2 * singles < groups.len() {
        return None;
    }
    columns
        .iter()
        .zip(tolerances)
        .find(|(name, tolerance)| {
            tolerance.is_none()
                && frame
                    .column(name)
                    .is_ok_and(|column| matches!(column.dtype(), DataType::Float32 | DataType::Float64))
        })
        .map(|(name, _)| name.clone())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn frame() -> DataFrame {
        df!(
            "sample" => ["b", "a", "b", "c", "a"],
            "contact" => [1i64, 1, 2, 1, 1],
            "rho" => [1.0, 2.0, 3.0, 4.0, 5.0],
        )
        .unwrap()
    }

    #[test]
    fn groups_keep_the_order_of_first_appearance() {
        let groups = group_rows(&frame(), &["sample".to_owned()], &[None]).unwrap();
        let keys: Vec<String> = groups
            .iter()
            .map(|group| group.key[0].get_str().unwrap().to_owned())
            .collect();
        assert_eq!(keys, ["b", "a", "c"]);
        let rows: Vec<Vec<IdxSize>> = groups.into_iter().map(|group| group.rows).collect();
        assert_eq!(rows, vec![vec![0, 2], vec![1, 4], vec![3]]);
    }

    #[test]
    fn several_group_columns_split_on_every_key() {
        let groups = group_rows(&frame(), &["sample".to_owned(), "contact".to_owned()], &[None, None]).unwrap();
        let rows: Vec<Vec<IdxSize>> = groups.into_iter().map(|group| group.rows).collect();
        assert_eq!(rows, vec![vec![0], vec![1, 4], vec![2], vec![3]]);
    }

    #[test]
    fn a_missing_group_column_names_the_columns_there_are() {
        let error = group_rows(&frame(), &["wafer".to_owned()], &[None]).unwrap_err();
        assert_eq!(error.kind, ErrorKind::ColumnProblem);
        assert_eq!(error.kind.code(), 4004);
        assert!(error.message.contains("`wafer`"), "{}", error.message);
        assert_eq!(error.param.as_deref(), Some("group_by"));
        assert_eq!(error.help.as_deref(), Some("its columns are: sample, contact, rho"));
    }

    #[test]
    fn another_input_gives_the_rows_of_the_same_key() {
        let groups = group_rows(&frame(), &["sample".to_owned()], &[None]).unwrap();
        let other = df!("sample" => ["a", "c", "a", "b"], "t" => [1.0, 2.0, 3.0, 4.0]).unwrap();
        let shares: Vec<Vec<IdxSize>> = groups
            .iter()
            .map(|group| rows_matching(&other, &["sample".to_owned()], &[None], group))
            .collect();
        assert_eq!(shares, vec![vec![3], vec![0, 2], vec![1]]);
        // A key the other input lacks gives it no rows.
        let none = df!("sample" => ["z"], "t" => [1.0]).unwrap();
        assert!(rows_matching(&none, &["sample".to_owned()], &[None], &groups[0]).is_empty());
    }

    /// A field sweep logged at two setpoints, its thermometer jittering by tens of mK: with
    /// a tolerance each setpoint is one group, keyed by its mean, whatever the order of rows.
    #[test]
    fn a_tolerance_keeps_a_jittering_column_in_one_group_per_setpoint() {
        let logged = df!(
            "sample" => ["s", "s", "s", "s", "s", "s"],
            "temperature_K" => [4.21, 10.02, 4.19, 9.97, 4.2, 10.01],
        )
        .unwrap();
        let columns = ["sample".to_owned(), "temperature_K".to_owned()];
        let exact = group_rows(&logged, &columns, &[None, None]).unwrap();
        assert_eq!(exact.len(), 6, "exact values split every row");
        assert_eq!(
            looks_jittery(&logged, &columns, &[None, None], &exact).as_deref(),
            Some("temperature_K")
        );
        let tolerances = [None, Some(0.5)];
        let groups = group_rows(&logged, &columns, &tolerances).unwrap();
        let rows: Vec<Vec<IdxSize>> = groups.iter().map(|group| group.rows.clone()).collect();
        assert_eq!(rows, vec![vec![0, 2, 4], vec![1, 3, 5]]);
        assert!(looks_jittery(&logged, &columns, &tolerances, &groups).is_none());
        let AnyValue::Float64(mean) = groups[1].key[1] else {
            panic!("a clustered key is a float: {:?}", groups[1].key[1]);
        };
        assert!((mean - 10.0).abs() < 1e-12, "{mean}");
        assert_eq!(groups[1].spans[1], Some((9.97, 10.02)));
        assert_eq!(
            groups[0].label(&columns),
            "sample=\"s\", temperature_K=4.2 (4.19 to 4.21)"
        );
        // Another input's rows join the group whose span they fall within the tolerance of.
        let other = df!("temperature_K" => [4.5, 10.6, 20.0], "x" => [1.0, 2.0, 3.0]).unwrap();
        let only_temperature = ["temperature_K".to_owned()];
        let groups = group_rows(&logged, &only_temperature, &[Some(0.5)]).unwrap();
        let shares: Vec<Vec<IdxSize>> = groups
            .iter()
            .map(|group| rows_matching(&other, &only_temperature, &[Some(0.5)], group))
            .collect();
        assert_eq!(shares, vec![vec![0], Vec::<IdxSize>::new()]);
    }

    /// One matcher serves every group of a run: each group gets the rows an exact or a
    /// tolerant comparison gives it, a group of nulls the other input's nulls.
    #[test]
    fn one_matcher_gives_every_group_its_rows_of_another_input() {
        let primary = df!(
            "sample" => ["s", "s", "s", "t"],
            "temperature_K" => [Some(4.2), Some(10.0), None, Some(4.2)],
        )
        .unwrap();
        let columns = ["sample".to_owned(), "temperature_K".to_owned()];
        let tolerances = [None, Some(0.5)];
        let groups = group_rows(&primary, &columns, &tolerances).unwrap();
        let other = df!(
            "sample" => ["t", "s", "s", "s", "s"],
            "temperature_K" => [Some(4.4), None, Some(9.6), Some(4.0), Some(7.0)],
            "x" => [1.0, 2.0, 3.0, 4.0, 5.0],
        )
        .unwrap();
        let matcher = GroupMatcher::new(&other, &columns, &tolerances);
        let shares: Vec<(String, Vec<IdxSize>)> = groups
            .iter()
            .map(|group| (group.label(&columns), matcher.rows_of(group)))
            .collect();
        let share = |label: &str| {
            shares
                .iter()
                .find(|(group, _)| group.as_str() == label)
                .unwrap_or_else(|| panic!("no group {label} in {shares:?}"))
                .1
                .clone()
        };
        assert_eq!(share("sample=\"s\", temperature_K=4.2"), vec![3]);
        assert_eq!(share("sample=\"s\", temperature_K=10"), vec![2]);
        assert_eq!(share("sample=\"s\", temperature_K=null"), vec![1]);
        assert_eq!(share("sample=\"t\", temperature_K=4.2"), vec![0]);
        // The same rows as the one-group form gives.
        for group in &groups {
            assert_eq!(
                matcher.rows_of(group),
                rows_matching(&other, &columns, &tolerances, group)
            );
        }
    }

    #[test]
    fn a_tolerance_on_a_text_column_is_refused_with_the_way_out() {
        let error = group_rows(&frame(), &["sample".to_owned()], &[Some(1.0)]).unwrap_err();
        assert_eq!(error.kind, ErrorKind::ColumnProblem);
        assert_eq!(error.param.as_deref(), Some("group_tolerance"));
        assert!(error.message.contains("numeric columns"), "{}", error.message);
        // Nulls are a group of their own.
        let with_null = df!("t" => [Some(1.0), None, Some(1.1)]).unwrap();
        let groups = group_rows(&with_null, &["t".to_owned()], &[Some(0.5)]).unwrap();
        let rows: Vec<Vec<IdxSize>> = groups.iter().map(|group| group.rows.clone()).collect();
        assert_eq!(rows, vec![vec![0, 2], vec![1]]);
    }

    /// A grouped summary of these groups, as a run with group_by makes it.
    fn grouped(groups: Value) -> RunSummary {
        RunSummary::Grouped(serde_json::from_value(json!({ "groups": groups })).unwrap())
    }

    #[test]
    fn an_ungrouped_summary_is_one_row() {
        let table = summary_table(
            &RunSummary::Single(json!({"n_m2": 2, "ok": true, "method": "fit"})),
            &[],
        )
        .unwrap();
        assert_eq!(table.height(), 1);
        assert_eq!(table.column("n_m2").unwrap().dtype(), &DataType::Float64);
        assert_eq!(table.column("ok").unwrap().dtype(), &DataType::Boolean);
        assert_eq!(table.column("method").unwrap().dtype(), &DataType::String);
    }

    #[test]
    fn grouped_summaries_put_the_group_columns_first_and_fill_gaps_with_null() {
        let summary = grouped(json!([
            {"group": {"sample": "a"}, "summary": {"n_m2": 1.0, "note": "x"}, "warnings": []},
            {"group": {"sample": "b"}, "summary": {"n_m2": 2.0, "extra": 3.0}, "warnings": []},
        ]));
        let table = summary_table(&summary, &["sample".to_owned()]).unwrap();
        let names: Vec<&str> = table.get_column_names().iter().map(|c| c.as_str()).collect();
        assert_eq!(names, ["sample", "n_m2", "note", "extra"]);
        assert_eq!(table.height(), 2);
        assert_eq!(table.column("extra").unwrap().null_count(), 1);
        assert_eq!(table.column("note").unwrap().null_count(), 1);
    }

    #[test]
    fn mixed_values_of_one_key_are_kept_as_json_text() {
        let summary = grouped(json!([
            {"group": {"sample": "a"}, "summary": {"v": 1.0}, "warnings": []},
            {"group": {"sample": "b"}, "summary": {"v": [1, 2]}, "warnings": []},
        ]));
        let table = summary_table(&summary, &["sample".to_owned()]).unwrap();
        let column = table.column("v").unwrap();
        assert_eq!(column.dtype(), &DataType::String);
        assert_eq!(column.get(1).unwrap().get_str(), Some("[1,2]"));
    }

    #[test]
    fn an_empty_summary_says_there_is_nothing_to_store() {
        let error = summary_table(&RunSummary::Single(json!({})), &[]).unwrap_err();
        assert_eq!(error.kind, ErrorKind::InvalidData);
        assert!(error.message.contains("empty summary"), "{}", error.message);
        let error = summary_table(&grouped(json!([])), &["sample".to_owned()]).unwrap_err();
        assert_eq!(error.kind, ErrorKind::InvalidData);
    }
}
