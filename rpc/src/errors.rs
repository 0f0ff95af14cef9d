//! Every error the daemon reports, with its stable JSON-RPC code.
//!
//! **Architecture Invariant.** Codes live in the protocol crate and nowhere else. They sit outside the range
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

/// The kinds of failure, each with a stable code: the protocol defines them, as clients see them.
pub use mobilis_protocol::ErrorKind;

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
        let data = mobilis_protocol::ErrorData {
            kind: self.kind.name().to_owned(),
            help: self.help.clone(),
            param: self.param.clone(),
        };
        serde_json::to_value(data).expect("error data serialises")
    }
}

impl std::fmt::Display for ServiceError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for ServiceError {}

pub type ServiceResult<T> = Result<T, ServiceError>;
