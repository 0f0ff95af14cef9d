//! Table glue of the magnetoresistance analyses: sweeps in (through
//! `mobilis_sdk::sweep_table`), parameters into the physics' settings, results out as tables
//! ready to plot and summaries.

pub mod classical;
pub mod quantum;

// The names below are still used by quantum.rs (through `use super::*`) and by
// sweep_tests.rs; the classical analyses use the SDK's own.
use mobilis_sdk::abi::{ColumnSpec, ColumnType};
use mobilis_sdk::sdk::AnalysisError;
use polars::prelude::*;

// still used by quantum.rs
pub(crate) fn invalid(message: impl Into<String>) -> AnalysisError {
    AnalysisError::InvalidInput(message.into())
}

// still used by quantum.rs
pub(crate) fn column(name: &str, dtype: ColumnType, unit: Option<&str>, description: &str) -> ColumnSpec {
    ColumnSpec::new(name, dtype, unit, description)
}

// still used by quantum.rs
pub(crate) fn floats(name: &str, values: Vec<f64>) -> Column {
    Column::new(PlSmallStr::from_str(name), values)
}

// still used by quantum.rs
pub(crate) fn optional(name: &str, values: Vec<Option<f64>>) -> Column {
    Column::new(PlSmallStr::from_str(name), values)
}

// still used by quantum.rs
pub(crate) fn frame(height: usize, columns: Vec<Column>) -> Result<DataFrame, AnalysisError> {
    DataFrame::new(height, columns).map_err(|e| AnalysisError::Numerical(e.to_string()))
}

#[cfg(test)]
mod sweep_tests;
