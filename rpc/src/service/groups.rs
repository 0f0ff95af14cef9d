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

/// Row indices of each group, in order of first appearance, with the key values.
pub(super) fn group_rows(
    frame: &DataFrame,
    columns: &[String],
) -> ServiceResult<Vec<(Vec<AnyValue<'static>>, Vec<IdxSize>)>> {
    let series: Vec<Series> = columns
        .iter()
        .map(|name| {
            frame
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
                })
        })
        .collect::<ServiceResult<_>>()?;
    let mut order: Vec<(Vec<AnyValue<'static>>, Vec<IdxSize>)> = Vec::new();
    let mut index_of: HashMap<String, usize> = HashMap::new();
    for row in 0..frame.height() {
        let key: Vec<AnyValue<'static>> = series
            .iter()
            .map(|s| s.get(row).expect("row in range").into_static())
            .collect();
        let text = format!("{key:?}");
        match index_of.get(&text) {
            Some(&position) => order[position].1.push(row as IdxSize),
            None => {
                index_of.insert(text, order.len());
                order.push((key, vec![row as IdxSize]));
            }
        }
    }
    Ok(order)
}

/// Rows of `frame` whose `columns` hold `key`: another input's share of one group.
pub(super) fn rows_matching(frame: &DataFrame, columns: &[String], key: &[AnyValue<'static>]) -> Vec<IdxSize> {
    let series: Vec<&Series> = columns
        .iter()
        .map(|name| frame.column(name).expect("checked").as_materialized_series())
        .collect();
    (0..frame.height())
        .filter(|&row| {
            series
                .iter()
                .zip(key)
                .all(|(s, k)| s.get(row).map(|v| v.into_static() == *k).unwrap_or(false))
        })
        .map(|row| row as IdxSize)
        .collect()
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
        let groups = group_rows(&frame(), &["sample".to_owned()]).unwrap();
        let keys: Vec<String> = groups
            .iter()
            .map(|(key, _)| key[0].get_str().unwrap().to_owned())
            .collect();
        assert_eq!(keys, ["b", "a", "c"]);
        let rows: Vec<Vec<IdxSize>> = groups.into_iter().map(|(_, rows)| rows).collect();
        assert_eq!(rows, vec![vec![0, 2], vec![1, 4], vec![3]]);
    }

    #[test]
    fn several_group_columns_split_on_every_key() {
        let groups = group_rows(&frame(), &["sample".to_owned(), "contact".to_owned()]).unwrap();
        let rows: Vec<Vec<IdxSize>> = groups.into_iter().map(|(_, rows)| rows).collect();
        assert_eq!(rows, vec![vec![0], vec![1, 4], vec![2], vec![3]]);
    }

    #[test]
    fn a_missing_group_column_names_the_columns_there_are() {
        let error = group_rows(&frame(), &["wafer".to_owned()]).unwrap_err();
        assert_eq!(error.kind, ErrorKind::ColumnProblem);
        assert_eq!(error.kind.code(), 4004);
        assert!(error.message.contains("`wafer`"), "{}", error.message);
        assert_eq!(error.param.as_deref(), Some("group_by"));
        assert_eq!(error.help.as_deref(), Some("its columns are: sample, contact, rho"));
    }

    #[test]
    fn another_input_gives_the_rows_of_the_same_key() {
        let groups = group_rows(&frame(), &["sample".to_owned()]).unwrap();
        let other = df!("sample" => ["a", "c", "a", "b"], "t" => [1.0, 2.0, 3.0, 4.0]).unwrap();
        let shares: Vec<Vec<IdxSize>> = groups
            .iter()
            .map(|(key, _)| rows_matching(&other, &["sample".to_owned()], key))
            .collect();
        assert_eq!(shares, vec![vec![3], vec![0, 2], vec![1]]);
        // A key the other input lacks gives it no rows.
        let none = df!("sample" => ["z"], "t" => [1.0]).unwrap();
        assert!(rows_matching(&none, &["sample".to_owned()], &groups[0].0).is_empty());
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
