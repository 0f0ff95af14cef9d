//! The errors clients see: each kind with its stable JSON-RPC code, and the error's `data`.
//!
//! Codes sit outside the range JSON-RPC reserves (-32768..-32000): 4xxx means "the request
//! must change", 5xxx "the daemon or a plugin failed on a valid request".

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

/// The kinds of failure, each with a stable code.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ErrorKind {
    /// Parameters are missing, of the wrong type or outside the allowed values.
    InvalidParams,
    /// No dataset of that name.
    UnknownDataset,
    /// No analysis of that name.
    UnknownAnalysis,
    /// An input table lacks a required column or has it with an unusable type.
    ColumnProblem,
    /// The output name is taken.
    DatasetExists,
    /// A path lies outside the allowed data roots.
    PathRefused,
    /// The data themselves are unusable for the analysis (reported by the plugin).
    InvalidData,
    /// A file could not be read or written, or has an unknown format.
    FileProblem,
    /// The plugin failed internally (a panic, an unusable output).
    PluginFailure,
    /// The computation failed on valid input.
    NumericalFailure,
    /// The client cancelled the request.
    Cancelled,
    /// The workspace could not be written.
    StorageFailure,
    /// The request asks for more than the daemon allows (memory budget, figure size).
    ResourceLimit,
    /// The call ran past its deadline and was stopped.
    DeadlineExceeded,
}

impl ErrorKind {
    /// The JSON-RPC error code of this kind (stable across versions).
    pub fn code(self) -> i32 {
        match self {
            ErrorKind::InvalidParams => 4001,
            ErrorKind::UnknownDataset => 4002,
            ErrorKind::UnknownAnalysis => 4003,
            ErrorKind::ColumnProblem => 4004,
            ErrorKind::DatasetExists => 4005,
            ErrorKind::PathRefused => 4006,
            ErrorKind::InvalidData => 4007,
            ErrorKind::FileProblem => 4008,
            ErrorKind::PluginFailure => 5001,
            ErrorKind::NumericalFailure => 5002,
            ErrorKind::Cancelled => 5003,
            ErrorKind::StorageFailure => 5004,
            ErrorKind::ResourceLimit => 4009,
            ErrorKind::DeadlineExceeded => 5005,
        }
    }

    /// The kind's name as it appears in the error's `data.kind`.
    pub fn name(self) -> &'static str {
        match self {
            ErrorKind::InvalidParams => "invalid_params",
            ErrorKind::UnknownDataset => "unknown_dataset",
            ErrorKind::UnknownAnalysis => "unknown_analysis",
            ErrorKind::ColumnProblem => "column_problem",
            ErrorKind::DatasetExists => "dataset_exists",
            ErrorKind::PathRefused => "path_refused",
            ErrorKind::InvalidData => "invalid_data",
            ErrorKind::FileProblem => "file_problem",
            ErrorKind::PluginFailure => "plugin_failure",
            ErrorKind::NumericalFailure => "numerical_failure",
            ErrorKind::Cancelled => "cancelled",
            ErrorKind::StorageFailure => "storage_failure",
            ErrorKind::ResourceLimit => "resource_limit",
            ErrorKind::DeadlineExceeded => "deadline_exceeded",
        }
    }

    /// Every kind, for the OpenRPC document.
    pub const ALL: [ErrorKind; 14] = [
        ErrorKind::InvalidParams,
        ErrorKind::UnknownDataset,
        ErrorKind::UnknownAnalysis,
        ErrorKind::ColumnProblem,
        ErrorKind::DatasetExists,
        ErrorKind::PathRefused,
        ErrorKind::InvalidData,
        ErrorKind::FileProblem,
        ErrorKind::PluginFailure,
        ErrorKind::NumericalFailure,
        ErrorKind::Cancelled,
        ErrorKind::StorageFailure,
        ErrorKind::ResourceLimit,
        ErrorKind::DeadlineExceeded,
    ];

    /// One line for the OpenRPC document.
    pub fn description(self) -> &'static str {
        match self {
            ErrorKind::InvalidParams => "parameters missing, mistyped or out of range",
            ErrorKind::UnknownDataset => "no dataset of that name; see dataset.list",
            ErrorKind::UnknownAnalysis => "no analysis of that name; see analysis.list",
            ErrorKind::ColumnProblem => "an input table lacks a required column or has it with an unusable type",
            ErrorKind::DatasetExists => "the output name is taken; choose another or pass overwrite: true",
            ErrorKind::PathRefused => "the path lies outside the daemon's data roots, or in its workspace",
            ErrorKind::InvalidData => "the data are unusable for the analysis",
            ErrorKind::FileProblem => "a file could not be read or written",
            ErrorKind::PluginFailure => "the plugin failed internally",
            ErrorKind::NumericalFailure => "the computation failed on valid input",
            ErrorKind::Cancelled => "the client cancelled the request",
            ErrorKind::StorageFailure => "the workspace could not be written",
            ErrorKind::ResourceLimit => {
                "the request asks for more than the daemon allows; the message names the limit and what to change"
            }
            ErrorKind::DeadlineExceeded => {
                "the call ran past its deadline and was stopped; pass a longer deadline_s or narrow the work"
            }
        }
    }
}

impl ErrorKind {
    /// The kind of a `data.kind` name.
    pub fn from_name(name: &str) -> Option<ErrorKind> {
        ErrorKind::ALL.into_iter().find(|kind| kind.name() == name)
    }

    /// The kind of an error code.
    pub fn from_code(code: i32) -> Option<ErrorKind> {
        ErrorKind::ALL.into_iter().find(|kind| kind.code() == code)
    }
}

/// The `data` member of every error the daemon answers with.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
pub struct ErrorData {
    /// the error's kind, as [`ErrorKind::name`]
    pub kind: String,
    /// what to do about it
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub help: Option<String>,
    /// the request parameter at fault, as a path (`output`, `inputs.readings`,
    /// `params.temperature_tolerance_K`, `group_by`)
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub param: Option<String>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codes_are_unique_and_outside_the_reserved_range() {
        let mut codes: Vec<i32> = ErrorKind::ALL.iter().map(|kind| kind.code()).collect();
        for code in &codes {
            assert!(!(-32768..=-32000).contains(code), "{code} is reserved by JSON-RPC");
        }
        codes.sort();
        codes.dedup();
        assert_eq!(codes.len(), ErrorKind::ALL.len());
        for kind in ErrorKind::ALL {
            assert_eq!(ErrorKind::from_name(kind.name()), Some(kind));
            assert_eq!(ErrorKind::from_code(kind.code()), Some(kind));
        }
    }
}
