//! Table glue of the magnetoresistance analyses: sweeps in (through
//! `mobilis_sdk::sweep_table`), parameters into the physics' settings, results out as tables
//! ready to plot and summaries.

pub mod classical;
pub mod quantum;

// The table builders of the shared sweep tests; the analyses build their outputs with the
// SDK's `OutputBuilder`.
#[cfg(test)]
use mobilis_sdk::sdk::AnalysisError;
#[cfg(test)]
use polars::prelude::*;

#[cfg(test)]
pub(crate) fn floats(name: &str, values: Vec<f64>) -> Column {
    Column::new(PlSmallStr::from_str(name), values)
}

#[cfg(test)]
pub(crate) fn frame(height: usize, columns: Vec<Column>) -> Result<DataFrame, AnalysisError> {
    DataFrame::new(height, columns).map_err(|e| AnalysisError::Numerical(e.to_string()))
}

#[cfg(test)]
mod sweep_tests;
