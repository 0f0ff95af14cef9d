//! Progress of long calls pushed to whoever listens: a `begin`, then `report`s, then one
//! `end` event, all under the `call_id` the client chose for the call (the progress token),
//! in the manner of language servers' work-done progress.
//!
//! The hub knows nothing of transports: `methods` turns a subscription into a channel
//! receiver here and forwards what arrives. Clients that cannot hold a subscription (plain
//! HTTP) poll `analysis.progress` instead.
//!
//! The `call_id` of `analysis.run`, `pipeline.run` or `dataset.import` is unique among running
//! calls (a pipeline's steps carry none of their own). A client subscribes (`progress.subscribe
//! {call_id}`, WebSocket and stdio) before starting the call; `report` events reach it at most
//! every [`REPORT_INTERVAL`] (100 ms), however often a plugin reports; after `end` (`done`,
//! `failed` or `cancelled`) the subscription is over, and a client that subscribes just after a
//! call ended gets its `end` at once. Every grouped run and pipeline reports per group and step
//! (`step 4 of 9 (spectrum.mobility) [sample=HEMT-A1, temperature_K=2]: ...`). `dataset.import`
//! reports its stages `reading the file`, `parsing`, `converting units` and `storing` at the
//! fractions 0, 0.2, 0.6 and 0.7 and honours a cancel between them. Inside one invocation,
//! `spectrum.mobility` and `spectrum.multi_carrier_fit` report as they go, the analyses whose
//! time grows with their settings; the others report their stages (reading, fitting, writing)
//! and look for a cancellation between them.

use serde_json::{json, Value};
use std::collections::{HashMap, VecDeque};
use std::sync::Mutex;
use std::time::{Duration, Instant};
use tokio::sync::mpsc::{unbounded_channel, UnboundedReceiver, UnboundedSender};

/// Plugins may report on every iteration; subscribers get at most one report per interval
/// so that a fast loop cannot flood a connection.
pub const REPORT_INTERVAL: Duration = Duration::from_millis(100);

/// How many finished calls keep their `end` event for late subscribers.
const FINISHED_KEPT: usize = 256;

/// How a call ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    Done,
    Failed,
    Cancelled,
}

impl Outcome {
    fn name(self) -> &'static str {
        match self {
            Outcome::Done => "done",
            Outcome::Failed => "failed",
            Outcome::Cancelled => "cancelled",
        }
    }
}

#[derive(Default)]
struct HubState {
    subscribers: HashMap<String, Vec<UnboundedSender<Value>>>,
    last_report: HashMap<String, Instant>,
    /// The end events of recently finished calls, oldest first: a client that subscribes
    /// just after its call returned still learns that it ended.
    finished: VecDeque<(String, Value)>,
}

impl HubState {
    fn publish(&mut self, call_id: &str, event: &Value) {
        if let Some(senders) = self.subscribers.get_mut(call_id) {
            senders.retain(|sender| sender.send(event.clone()).is_ok());
            if senders.is_empty() {
                self.subscribers.remove(call_id);
            }
        }
    }
}

/// Routes progress events from running calls to their subscribers.
#[derive(Default)]
pub struct ProgressHub {
    state: Mutex<HubState>,
}

impl ProgressHub {
    /// Events of `call_id` from now on. A call that ended recently yields its end event at once.
    pub fn subscribe(&self, call_id: &str) -> UnboundedReceiver<Value> {
        let (sender, receiver) = unbounded_channel();
        let mut state = self.state.lock().expect("progress hub");
        if let Some((_, end)) = state.finished.iter().rev().find(|(id, _)| id == call_id) {
            let _ = sender.send(end.clone());
            return receiver;
        }
        state.subscribers.entry(call_id.to_owned()).or_default().push(sender);
        receiver
    }

    /// A call has started: forget any earlier call of the same id.
    pub fn begin(&self, call_id: &str, title: &str) {
        let mut state = self.state.lock().expect("progress hub");
        state.finished.retain(|(id, _)| id != call_id);
        state.last_report.remove(call_id);
        let event = json!({ "call_id": call_id, "kind": "begin", "title": title });
        state.publish(call_id, &event);
    }

    /// The call's overall fraction done (0 to 1) and what it is doing; throttled.
    pub fn report(&self, call_id: &str, fraction: f64, message: &str) {
        let mut state = self.state.lock().expect("progress hub");
        if !state.subscribers.contains_key(call_id) {
            return;
        }
        let now = Instant::now();
        if let Some(last) = state.last_report.get(call_id) {
            if now.duration_since(*last) < REPORT_INTERVAL {
                return;
            }
        }
        state.last_report.insert(call_id.to_owned(), now);
        let fraction = if fraction.is_finite() {
            fraction.clamp(0.0, 1.0)
        } else {
            0.0
        };
        let event = json!({ "call_id": call_id, "kind": "report", "fraction": fraction, "message": message });
        state.publish(call_id, &event);
    }

    /// The call has ended; subscribers get the end event and are then let go.
    pub fn end(&self, call_id: &str, outcome: Outcome, message: Option<&str>) {
        let mut state = self.state.lock().expect("progress hub");
        let mut event = json!({ "call_id": call_id, "kind": "end", "outcome": outcome.name() });
        if let Some(message) = message {
            event["message"] = json!(message);
        }
        state.publish(call_id, &event);
        state.subscribers.remove(call_id);
        state.last_report.remove(call_id);
        if state.finished.len() == FINISHED_KEPT {
            state.finished.pop_front();
        }
        state.finished.push_back((call_id.to_owned(), event));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn drain(receiver: &mut UnboundedReceiver<Value>) -> Vec<Value> {
        let mut events = Vec::new();
        while let Ok(event) = receiver.try_recv() {
            events.push(event);
        }
        events
    }

    #[test]
    fn a_subscriber_sees_begin_reports_and_end_in_order() {
        let hub = ProgressHub::default();
        let mut receiver = hub.subscribe("c1");
        hub.begin("c1", "spectrum.mobility");
        hub.report("c1", 0.25, "kernel");
        hub.report("c1", 0.5, "dropped by the throttle");
        hub.end("c1", Outcome::Done, None);
        let events = drain(&mut receiver);
        let kinds: Vec<&str> = events.iter().map(|e| e["kind"].as_str().unwrap()).collect();
        assert_eq!(kinds, ["begin", "report", "end"]);
        assert_eq!(events[1]["fraction"], 0.25);
        assert_eq!(events[2]["outcome"], "done");
        // The hub let the subscriber go: the channel is closed.
        assert!(receiver.try_recv().is_err());
        assert!(receiver.is_closed() || receiver.try_recv().is_err());
    }

    #[test]
    fn a_late_subscriber_learns_the_end_at_once() {
        let hub = ProgressHub::default();
        hub.begin("c2", "x");
        hub.end("c2", Outcome::Cancelled, Some("cancelled by the client"));
        let mut receiver = hub.subscribe("c2");
        let events = drain(&mut receiver);
        assert_eq!(events.len(), 1);
        assert_eq!(events[0]["outcome"], "cancelled");
        // A new call under the same id starts afresh.
        let mut again = {
            hub.begin("c2", "y");
            hub.subscribe("c2")
        };
        hub.end("c2", Outcome::Failed, Some("bad input"));
        assert_eq!(drain(&mut again)[0]["outcome"], "failed");
    }

    #[test]
    fn fractions_are_clamped_and_other_calls_are_not_disturbed() {
        let hub = ProgressHub::default();
        let mut first = hub.subscribe("a");
        let mut second = hub.subscribe("b");
        hub.report("a", 1.5, "over");
        hub.report("b", f64::NAN, "not a number");
        assert_eq!(drain(&mut first)[0]["fraction"], 1.0);
        assert_eq!(drain(&mut second)[0]["fraction"], 0.0);
    }
}
