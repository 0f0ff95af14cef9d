//! Every error the daemon reports, with its stable JSON-RPC code.
//!
//! **Architecture Invariant.** Codes live here and nowhere else. They sit outside the range
//! JSON-RPC reserves (-32768..-32000, where jsonrpsee also puts its own -32000..-32011):
//! 4xxx means "the request must change", 5xxx "the daemon or a plugin failed on a valid
//! request". Every message says what to change; the `data` member carries the kind as a
//! string and, where useful, a help line.
//!
//! When one request parameter is at fault the error also carries `data.param`, its path in the
//! request (`inputs.readings`, `params.temperature_tolerance_K`, `output`, `summary_output`,
//! `group_by`, `analysis`): a new error about one parameter gets [`ServiceError::with_param`].
//! The help line speaks JSON-RPC; the CLI turns `param` into its option and the method names
//! into commands (`clients/cli/src/cli_errors.rs`), so a new JSON phrase in a help line needs a
//! row in that file's table of phrases. The codes and their one-line meanings are listed in
//! `rpc.discover` (each method's `errors`).

use serde_json::json;

/// A failure of one request; the daemon keeps serving.
#[derive(Debug, Clone, PartialEq)]
pub struct ServiceError {
    pub kind: ErrorKind,
    pub message: String,
    pub help: Option<String>,
    /// The request parameter at fault, as a path (`overwrite`, `inputs.readings`,
    /// `params.temperature_tolerance_K`, `group_by`), so that a client can name its own
    /// option for it instead of the JSON field.
    pub param: Option<String>,
}

/// The kinds of failure, each with a stable code.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
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

impl ServiceError {
    pub fn new(kind: ErrorKind, message: impl Into<String>) -> Self {
        ServiceError {
            kind,
            message: message.into(),
            help: None,
            param: None,
        }
    }

    /// Names the request parameter at fault (`data.param`).
    pub fn with_param(mut self, param: impl Into<String>) -> Self {
        self.param = Some(param.into());
        self
    }

    pub fn with_help(mut self, help: impl Into<String>) -> Self {
        self.help = Some(help.into());
        self
    }

    pub fn invalid_params(message: impl Into<String>) -> Self {
        Self::new(ErrorKind::InvalidParams, message)
    }

    pub fn unknown_dataset(name: &str) -> Self {
        Self::new(ErrorKind::UnknownDataset, format!("no dataset named `{name}`"))
            .with_help("import it with dataset.import or list the stored ones with dataset.list")
    }

    /// The `data` member of the JSON-RPC error object.
    pub fn data(&self) -> serde_json::Value {
        let mut data = json!({ "kind": self.kind.name() });
        if let Some(help) = &self.help {
            data["help"] = json!(help);
        }
        if let Some(param) = &self.param {
            data["param"] = json!(param);
        }
        data
    }
}

impl std::fmt::Display for ServiceError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for ServiceError {}

pub type ServiceResult<T> = Result<T, ServiceError>;

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
    }
}
