//! Every call bounded: a deadline per call, and cancellation when nobody waits any more.
//!
//! A method that reads files, runs a plugin or draws runs on a blocking thread under a
//! [`CallScope`], owned by the request's future. Two things end a call early:
//!
//! - **Its deadline.** A documented default per method ([`default_deadline`]), or the
//!   request's `deadline_s` on the methods that take it ([`DEADLINE_METHODS`]). When it
//!   passes the client gets error 5005 `deadline_exceeded` at once.
//! - **Its client going away.** The transports drop a request's future when its connection
//!   closes; the scope's `Drop` then stops the call.
//!
//! Stopping sets the cancel flag of every analysis the call started (the flag plugins poll,
//! see `analysis.cancel`) and closes the call's commit gate: whatever the work finishes
//! afterwards, it cannot store it. The service stores only through [`commit`], which runs
//! while the gate is open and keeps it shut for the others; so a call answered with 5005
//! stored nothing, and one whose store had begun is answered with what it did.
//!
//! The service finds its call's scope through a thread-local set for the duration of the
//! work, so that its methods keep their signatures, whichever thread pool runs them.
//!
//! The defaults: 600 s for `analysis.run` and `pipeline.run`, 300 s for `dataset.import` and
//! `dataset.export`, 120 s for the others. `analysis.run`, `pipeline.run`, `plot.render` and
//! `report.render` take `deadline_s` (above 0, at most [`MAX_DEADLINE_S`], one day; `mobilis
//! run --deadline`). The scopes are registered in `methods::module`. An `analysis.run` answered
//! 5005 stored nothing; a pipeline keeps the outputs of the steps that finished before its
//! deadline, and stops before its next group or step. Work that does not poll the cancel flag
//! (a drawing, a plugin without cancel checks) runs on to its end, unseen.
//!
//! The checks: `cargo test -p mobilis-tests --test suite -- reliability::workspace_and_bounds
//! --nocapture` (path attacks through both kinds of root, a symlink race on imports and
//! exports, export overwrite and racing exports, clients that go away over HTTP and WebSocket,
//! deadlines, figure limits); `MOBILIS_SLOW_TESTS=1` runs more rounds.

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use crate::plugin_host::CallControl;
use jsonrpsee::types::{ErrorObjectOwned, Params};
use serde_json::Value;
use std::cell::RefCell;
use std::sync::atomic::Ordering;
use std::sync::{Arc, Mutex};
use std::time::Duration;

/// The methods that take a `deadline_s` parameter.
pub const DEADLINE_METHODS: [&str; 4] = ["analysis.run", "pipeline.run", "plot.render", "report.render"];

/// The longest deadline a request may ask for: a day.
pub const MAX_DEADLINE_S: f64 = 86_400.0;

/// A method's deadline when the request gives none: 600 s for analyses and pipelines (long
/// fits pass their own), 300 s for imports and exports (files of hundreds of megabytes),
/// 120 s for everything else.
pub fn default_deadline(method: &str) -> Duration {
    Duration::from_secs(match method {
        "analysis.run" | "pipeline.run" => 600,
        "dataset.import" | "dataset.export" => 300,
        _ => 120,
    })
}

/// Why a call stopped before it finished.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Stop {
    Deadline,
    ClientGone,
}

#[derive(Default)]
struct BoundState {
    stop: Option<Stop>,
    /// A store is under way: a stop asked for now takes effect when it ends.
    committing: bool,
    pending: Option<Stop>,
    /// The controls of the analyses the call started, to cancel them.
    controls: Vec<Arc<CallControl>>,
}

impl BoundState {
    fn apply(&mut self, stop: Stop) {
        self.stop.get_or_insert(stop);
        for control in &self.controls {
            control.cancelled.store(true, Ordering::Relaxed);
        }
    }
}

/// What the work of one call shares with the request that waits for it.
pub struct CallBound {
    method: &'static str,
    deadline: Duration,
    state: Mutex<BoundState>,
}

impl CallBound {
    fn state(&self) -> std::sync::MutexGuard<'_, BoundState> {
        // The state holds no invariant a panic could break half-way: go on after one.
        self.state.lock().unwrap_or_else(|poisoned| poisoned.into_inner())
    }

    /// Stops the call unless a store is under way; true when it took effect at once.
    fn request_stop(&self, stop: Stop) -> bool {
        let mut state = self.state();
        if state.committing {
            state.pending.get_or_insert(stop);
            return false;
        }
        state.apply(stop);
        true
    }

    fn stop_error(&self, stop: Stop) -> ServiceError {
        match stop {
            Stop::Deadline => deadline_error(self.method, self.deadline),
            Stop::ClientGone => ServiceError::new(
                ErrorKind::Cancelled,
                format!("{}: the client went away; the call was stopped", self.method),
            ),
        }
    }

    /// Runs the work with this bound as the thread's current one.
    fn enter<T>(self: &Arc<Self>, work: impl FnOnce() -> T) -> T {
        struct Reset(Option<Arc<CallBound>>);
        impl Drop for Reset {
            fn drop(&mut self) {
                CURRENT.with(|current| *current.borrow_mut() = self.0.take());
            }
        }
        let previous = CURRENT.with(|current| current.borrow_mut().replace(self.clone()));
        let _reset = Reset(previous);
        work()
    }
}

fn deadline_error(method: &str, deadline: Duration) -> ServiceError {
    let seconds = deadline.as_secs_f64();
    let help = if DEADLINE_METHODS.contains(&method) {
        format!("pass a longer deadline_s (up to {MAX_DEADLINE_S}), or narrow the work (fewer rows, a filter, fewer groups)")
    } else {
        "narrow the work (a smaller file, fewer rows); this method's deadline is fixed".to_owned()
    };
    let stored = if method == "pipeline.run" {
        "the outputs of steps that finished before it are kept"
    } else {
        "nothing was stored by it"
    };
    ServiceError::new(
        ErrorKind::DeadlineExceeded,
        format!("{method} ran past its deadline of {seconds} s and was stopped; {stored}"),
    )
    .with_param("deadline_s")
    .with_help(help)
}

thread_local! {
    static CURRENT: RefCell<Option<Arc<CallBound>>> = const { RefCell::new(None) };
}

fn current() -> Option<Arc<CallBound>> {
    CURRENT.with(|current| current.borrow().clone())
}

/// Puts an analysis's control under the current call's bound: stopping the call cancels it.
/// Outside a bounded call (tests calling the service directly) it does nothing.
pub fn watch(control: &Arc<CallControl>) {
    let Some(bound) = current() else { return };
    let mut state = bound.state();
    if state.stop.is_some() {
        control.cancelled.store(true, Ordering::Relaxed);
    }
    state.controls.push(control.clone());
}

/// Stores through `store` while the call is live; a stopped call stores nothing and gets
/// the reason as its error. Outside a bounded call it just runs `store`.
pub fn commit<T>(store: impl FnOnce() -> ServiceResult<T>) -> ServiceResult<T> {
    let _gate = committing()?;
    store()
}

/// Holds the current call's commit gate until dropped: stores made meanwhile are the call's,
/// and a stop asked for meanwhile waits for them. A stopped call gets the reason instead.
pub fn committing() -> ServiceResult<CommitGate> {
    let Some(bound) = current() else {
        return Ok(CommitGate(None));
    };
    {
        let mut state = bound.state();
        if let Some(stop) = state.stop {
            return Err(bound.stop_error(stop));
        }
        state.committing = true;
    }
    Ok(CommitGate(Some(bound)))
}

/// See [`committing`].
pub struct CommitGate(Option<Arc<CallBound>>);

impl Drop for CommitGate {
    fn drop(&mut self) {
        let Some(bound) = &self.0 else { return };
        let mut state = bound.state();
        state.committing = false;
        if let Some(stop) = state.pending.take() {
            state.apply(stop);
        }
    }
}

/// Owns a call on behalf of its request; dropped before the call finished (the client
/// went away), it stops the call.
pub struct CallScope {
    bound: Arc<CallBound>,
    finished: bool,
}

impl CallScope {
    pub fn new(method: &'static str, deadline: Duration) -> CallScope {
        CallScope {
            bound: Arc::new(CallBound {
                method,
                deadline,
                state: Mutex::new(BoundState::default()),
            }),
            finished: false,
        }
    }

    /// Runs `work` on a blocking thread and answers with its result, or with error 5005 as
    /// soon as the deadline passes.
    pub async fn run<T: Send + 'static>(
        mut self,
        slots: Option<&crate::compute_slots::ComputeSlots>,
        work: impl FnOnce() -> Result<T, ErrorObjectOwned> + Send + 'static,
    ) -> Result<T, ErrorObjectOwned> {
        // Heavy calls wait for a compute slot first; the wait counts against the deadline.
        let permit = match slots {
            Some(slots) => match tokio::time::timeout(self.bound.deadline, slots.acquire()).await {
                Ok(Ok(permit)) => Some(permit),
                Ok(Err(_)) => {
                    self.finished = true;
                    return Err(to_rpc_error(ServiceError::new(
                        ErrorKind::StorageFailure,
                        "the daemon is shutting down and ran no more work; send the request again once it is back",
                    )));
                }
                Err(_) => {
                    self.finished = true;
                    return Err(to_rpc_error(deadline_error(self.bound.method, self.bound.deadline)));
                }
            },
            None => None,
        };
        let bound = self.bound.clone();
        let mut handle = tokio::task::spawn_blocking(move || {
            // The slot stays taken until the work really ends, even if its client has gone.
            let _slot = permit;
            let result = bound.enter(work);
            // A stopped call's own error (a plugin's "cancelled") is reported as the stop.
            match (result, bound.state().stop) {
                (Err(_), Some(stop)) => Err(to_rpc_error(bound.stop_error(stop))),
                (result, _) => result,
            }
        });
        let answer = tokio::select! {
            joined = &mut handle => joined,
            _ = tokio::time::sleep(self.bound.deadline) => {
                if self.bound.request_stop(Stop::Deadline) {
                    self.finished = true;
                    tracing::info!(method = self.bound.method, deadline_s = self.bound.deadline.as_secs_f64(), "call stopped at its deadline");
                    return Err(to_rpc_error(deadline_error(self.bound.method, self.bound.deadline)));
                }
                // A store was under way when the deadline passed: the work's own answer
                // says what it stored.
                (&mut handle).await
            }
        };
        self.finished = true;
        answer.unwrap_or_else(|_| {
            Err(to_rpc_error(ServiceError::new(
                ErrorKind::PluginFailure,
                "internal error while handling the request; the daemon keeps serving and stored datasets are unchanged",
            )))
        })
    }
}

impl Drop for CallScope {
    fn drop(&mut self) {
        if !self.finished {
            tracing::info!(method = self.bound.method, "client gone: call stopped");
            self.bound.request_stop(Stop::ClientGone);
        }
    }
}

fn to_rpc_error(error: ServiceError) -> ErrorObjectOwned {
    ErrorObjectOwned::owned(error.kind.code(), error.message.clone(), Some(error.data()))
}

/// The request's deadline (its `deadline_s`, checked against the method's documented schema
/// before) and its params without it, for the method's own parser.
pub fn take_deadline(
    method: &'static str,
    params: Params<'static>,
) -> Result<(Duration, Params<'static>), ErrorObjectOwned> {
    let default = default_deadline(method);
    if !DEADLINE_METHODS.contains(&method) {
        return Ok((default, params));
    }
    let Some(text) = params.as_str() else {
        return Ok((default, params));
    };
    let Ok(Value::Object(mut members)) = serde_json::from_str::<Value>(text) else {
        return Ok((default, params));
    };
    let Some(given) = members.remove("deadline_s") else {
        return Ok((default, params));
    };
    let seconds = given
        .as_f64()
        .filter(|s| s.is_finite() && *s > 0.0 && *s <= MAX_DEADLINE_S);
    let Some(seconds) = seconds else {
        return Err(to_rpc_error(
            ServiceError::invalid_params(format!(
                "{method}: deadline_s must be a number of seconds above 0 and at most {MAX_DEADLINE_S} (got {given})"
            ))
            .with_param("deadline_s"),
        ));
    };
    let rest = Value::Object(members).to_string();
    Ok((Duration::from_secs_f64(seconds), Params::new(Some(&rest)).into_owned()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[tokio::test(flavor = "multi_thread")]
    async fn a_passed_deadline_answers_at_once_and_closes_the_gate() {
        let control = Arc::new(CallControl::default());
        let seen = control.clone();
        let stored = Arc::new(Mutex::new(false));
        let flag = stored.clone();
        let started = std::time::Instant::now();
        let answer = CallScope::new("analysis.run", Duration::from_millis(50))
            .run(None, move || {
                watch(&seen);
                while !seen.cancelled.load(Ordering::Relaxed) {
                    std::thread::sleep(Duration::from_millis(5));
                }
                commit(|| {
                    *flag.lock().unwrap() = true;
                    Ok(())
                })
                .map_err(to_rpc_error)?;
                Ok(Value::Null)
            })
            .await;
        assert_eq!(answer.unwrap_err().code(), 5005);
        assert!(started.elapsed() < Duration::from_secs(5));
        // The work saw the cancel flag and could not store.
        tokio::time::sleep(Duration::from_millis(100)).await;
        assert!(control.cancelled.load(Ordering::Relaxed));
        assert!(!*stored.lock().unwrap());
    }

    #[tokio::test(flavor = "multi_thread")]
    async fn a_dropped_scope_cancels_its_analyses() {
        let control = Arc::new(CallControl::default());
        let seen = control.clone();
        let call = CallScope::new("analysis.run", Duration::from_secs(60)).run(None, move || {
            watch(&seen);
            while !seen.cancelled.load(Ordering::Relaxed) {
                std::thread::sleep(Duration::from_millis(5));
            }
            Ok(Value::Null)
        });
        // The client waits 100 ms, then goes away.
        assert!(tokio::time::timeout(Duration::from_millis(100), call).await.is_err());
        let started = std::time::Instant::now();
        while !control.cancelled.load(Ordering::Relaxed) {
            assert!(started.elapsed() < Duration::from_secs(5), "not cancelled");
            tokio::time::sleep(Duration::from_millis(5)).await;
        }
    }

    #[test]
    fn deadline_s_is_taken_out_of_the_params() {
        let params = Params::new(Some(r#"{"dataset": "a", "deadline_s": 2.5}"#)).into_owned();
        let (deadline, rest) = take_deadline("plot.render", params).unwrap();
        assert_eq!(deadline, Duration::from_secs_f64(2.5));
        assert_eq!(rest.as_str(), Some(r#"{"dataset":"a"}"#));
        let params = Params::new(Some(r#"{"name": "a"}"#)).into_owned();
        assert_eq!(
            take_deadline("dataset.export", params).unwrap().0,
            Duration::from_secs(300)
        );
        let params = Params::new(Some(r#"{"sample": "a", "deadline_s": 1e9}"#)).into_owned();
        assert_eq!(take_deadline("report.render", params).unwrap_err().code(), 4001);
        assert_eq!(commit(|| Ok(3)).unwrap(), 3);
    }
}
