//! Table glue of the magnetoresistance analyses: sweeps in (through
//! `mobilis_sdk::sweep_table`), parameters into the physics' settings, results out as tables
//! ready to plot and summaries.

pub mod classical;
pub mod quantum;

#[cfg(test)]
mod sweep_tests;
