//! Table glue of the magnetoresistance analyses: sweeps in (through
//! `mobilis_sdk::sweep_table`), parameters into the physics' settings, results out as tables
//! ready to plot and summaries.

pub mod classical;
pub mod quantum;

use mobilis_sdk::abi::{ColumnSpec, ColumnType};
use mobilis_sdk::sdk::AnalysisError;
use polars::prelude::*;

pub(crate) fn invalid(message: impl Into<String>) -> AnalysisError {
    AnalysisError::InvalidInput(message.into())
}

pub(crate) fn column(name: &str, dtype: ColumnType, unit: Option<&str>, description: &str) -> ColumnSpec {
    ColumnSpec::new(name, dtype, unit, description)
}

pub(crate) fn floats(name: &str, values: Vec<f64>) -> Column {
    Column::new(PlSmallStr::from_str(name), values)
}

pub(crate) fn optional(name: &str, values: Vec<Option<f64>>) -> Column {
    Column::new(PlSmallStr::from_str(name), values)
}

pub(crate) fn frame(height: usize, columns: Vec<Column>) -> Result<DataFrame, AnalysisError> {
    DataFrame::new(height, columns).map_err(|e| AnalysisError::Numerical(e.to_string()))
}

#[cfg(test)]
mod sweep_tests;
