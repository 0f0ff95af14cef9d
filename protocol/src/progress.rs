//! The notifications of a progress subscription, in the manner of language servers'
//! work-done progress: one `begin`, then `report`s, then one `end`.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

/// The method name of the notifications a progress subscription sends; their params are
/// `{subscription, result: event}`.
pub const PROGRESS_NOTIFICATION: &str = "progress.event";

/// How a call ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum Outcome {
    Done,
    Failed,
    Cancelled,
}

impl Outcome {
    /// The name on the wire.
    pub fn name(self) -> &'static str {
        match self {
            Outcome::Done => "done",
            Outcome::Failed => "failed",
            Outcome::Cancelled => "cancelled",
        }
    }
}

impl PartialEq<str> for Outcome {
    fn eq(&self, name: &str) -> bool {
        self.name() == name
    }
}

/// One progress event of the call `call_id`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum ProgressEvent {
    /// The call started.
    Begin { call_id: String, title: String },
    /// How far the call is, at most every 100 ms.
    Report {
        call_id: String,
        /// 0 to 1
        fraction: f64,
        message: String,
    },
    /// The call ended; the subscription is over.
    End {
        call_id: String,
        outcome: Outcome,
        #[serde(default, skip_serializing_if = "Option::is_none")]
        message: Option<String>,
    },
}

impl ProgressEvent {
    /// The call the event belongs to.
    pub fn call_id(&self) -> &str {
        match self {
            ProgressEvent::Begin { call_id, .. }
            | ProgressEvent::Report { call_id, .. }
            | ProgressEvent::End { call_id, .. } => call_id,
        }
    }
}
