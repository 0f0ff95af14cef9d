//! One call into a plugin, as the host and the worker pool both see it: which plugin
//! answered, the call's progress and cancellation, and what it returned or why it failed.
//! Kept below the host and the supervisor so that neither imports the other for them.

use polars::prelude::DataFrame;
use std::sync::atomic::AtomicBool;

/// A plugin's descriptor fields, as the host reports them.
#[derive(Debug, Clone)]
pub struct PluginIdentity {
    pub name: String,
    pub version: String,
    pub abi_minor: u32,
}

/// How a call into a plugin failed.
#[derive(Debug, Clone, PartialEq)]
pub struct InvokeFailure {
    pub status: i32,
    pub message: String,
}

/// What a successful call returns.
pub struct InvokeSuccess {
    pub table: DataFrame,
    pub summary: serde_json::Value,
    pub warnings: Vec<String>,
}

/// Receives a call's overall fraction done and message.
pub type ProgressListener = Box<dyn Fn(f64, &str) + Send + Sync>;

/// Progress and cancellation of one running call, shared with the client side.
///
/// A plugin reports the fraction of its own invocation; a call may be many invocations
/// (one per group, one per pipeline step), so the control maps each onto the share of the
/// whole call it covers, the [`ProgressSpan`], before storing and announcing it.
#[derive(Default)]
pub struct CallControl {
    pub cancelled: AtomicBool,
    pub progress: std::sync::Mutex<Option<(f64, String)>>,
    span: std::sync::Mutex<ProgressSpan>,
    listener: Option<ProgressListener>,
}

/// The share of a whole call that the current piece of work covers.
#[derive(Debug, Clone, PartialEq)]
pub struct ProgressSpan {
    pub start: f64,
    pub width: f64,
    /// Prefixed to the plugin's messages, for example `step 2 of 5 (carriers.arrhenius)`.
    pub label: String,
}

impl Default for ProgressSpan {
    fn default() -> Self {
        ProgressSpan {
            start: 0.0,
            width: 1.0,
            label: String::new(),
        }
    }
}

impl ProgressSpan {
    /// Part `index` of `count` equal parts of this span, labelled `label`.
    pub fn part(&self, index: usize, count: usize, label: &str) -> ProgressSpan {
        let width = self.width / count.max(1) as f64;
        let label = match (self.label.is_empty(), label.is_empty()) {
            (true, _) => label.to_owned(),
            (false, true) => self.label.clone(),
            (false, false) => format!("{} {label}", self.label),
        };
        ProgressSpan {
            start: self.start + width * index as f64,
            width,
            label,
        }
    }
}

impl CallControl {
    /// A control whose progress also goes to `listener`.
    pub fn with_listener(listener: ProgressListener) -> CallControl {
        CallControl {
            listener: Some(listener),
            ..CallControl::default()
        }
    }

    /// The span the next invocation reports into.
    pub fn span(&self) -> ProgressSpan {
        self.span.lock().map(|s| s.clone()).unwrap_or_default()
    }

    /// Sets the span the next invocation reports into and announces its start.
    pub fn enter(&self, span: ProgressSpan) {
        let labelled = !span.label.is_empty();
        if let Ok(mut slot) = self.span.lock() {
            *slot = span;
        }
        // A labelled part (a group, a pipeline step) says it has started; a whole call
        // leaves its first word to the plugin.
        if labelled {
            self.record(0.0, "");
        }
    }

    /// Records a plugin's fraction of its own invocation (0 to 1) as progress of the whole call.
    pub fn record(&self, fraction: f64, message: &str) {
        let span = self.span();
        let fraction = if fraction.is_finite() {
            fraction.clamp(0.0, 1.0)
        } else {
            0.0
        };
        let overall = span.start + span.width * fraction;
        let message = match (span.label.is_empty(), message.is_empty()) {
            (true, _) => message.to_owned(),
            (false, true) => span.label.clone(),
            (false, false) => format!("{}: {message}", span.label),
        };
        if let Some(listener) = &self.listener {
            listener(overall, &message);
        }
        if let Ok(mut slot) = self.progress.lock() {
            *slot = Some((overall, message));
        }
    }
}
