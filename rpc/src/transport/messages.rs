//! The one message handler of HTTP, WebSocket and stdio: a JSON-RPC 2.0 message (a request,
//! a notification or a batch) in, the text of its answer out.
//!
//! jsonrpsee represents an id as a string, an unsigned 64-bit integer or null, but the
//! JSON-RPC 2.0 specification (section 4) allows any string, any number or null: `-1`,
//! `1.5`, `18446744073709551616` and `1e400` are ids too. So the request is read here as raw
//! JSON, its id is replaced by a stand-in number before the methods see it, and the answer
//! carries the client's id back byte for byte. Ids of kinds the specification disallows
//! (objects, arrays, booleans) get the Invalid Request error with id null (section 5).
//!
//! Batches follow section 6: an empty array is one Invalid Request error, each entry that is
//! not a request object gets its own error, notifications get no answer, and a batch of
//! notifications gets no answer at all.

use super::limits::MAX_RESPONSE_BYTES;
use crate::errors::{ErrorKind, ServiceError};
use jsonrpsee::types::ErrorObjectOwned;
use jsonrpsee::{MethodCallback, Methods};
use serde_json::value::RawValue;
use std::collections::HashMap;
use std::future::Future;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex};
use std::task::Poll;
use tokio::sync::{mpsc, Semaphore};
use tokio::task::JoinSet;

/// JSON-RPC 2.0 error codes (specification, section 5.1).
pub(super) const PARSE_ERROR: i32 = -32700;
pub(super) const INVALID_REQUEST: i32 = -32600;

/// Most entries in one batch: a batch is answered as a whole, so it is bounded like a body.
const MAX_BATCH_ENTRIES: usize = 10_000;
/// Notifications a subscription may have queued before the transport reads them.
const NOTIFICATION_BUFFER: usize = 64;
/// Calls one connection may have running at once; the connection's reader waits beyond.
const MAX_CALLS_IN_FLIGHT: usize = 256;

/// Which transport a message came by: subscriptions need a connection that stays open.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Via {
    Http,
    WebSocket,
    Stdio,
}

/// The notifications of a subscription a request opened.
pub(super) type Notifications = mpsc::Receiver<Box<RawValue>>;

/// What a message gets back: the answer's text (none for notifications) and the
/// subscriptions it opened, whose notifications follow the answer.
pub(super) struct Answer {
    pub reply: Option<String>,
    pub subscriptions: Vec<Notifications>,
}

/// The shared handler: the methods, their names, and the stand-in ids.
#[derive(Clone)]
pub(super) struct Dispatcher {
    inner: Arc<Inner>,
}

struct Inner {
    methods: Methods,
    known: Vec<String>,
    next_stand_in: AtomicU64,
}

/// A JSON-RPC error answer with the given id (raw JSON text).
pub(super) fn error_reply(id: &str, code: i32, message: &str, data: Option<serde_json::Value>) -> String {
    let mut error = serde_json::json!({"code": code, "message": message});
    if let Some(data) = data {
        error["data"] = data;
    }
    format!(r#"{{"jsonrpc":"2.0","id":{id},"error":{error}}}"#)
}

/// A Parse error (-32700) answer: the message or frame could not be read.
pub(super) fn parse_error(message: &str) -> String {
    error_reply("null", PARSE_ERROR, message, None)
}

/// What kind of JSON a raw value is, in words, for error messages.
fn kind_of(raw: &str) -> &'static str {
    match raw.as_bytes().first() {
        Some(b'{') => "an object",
        Some(b'[') => "an array",
        Some(b'"') => "a string",
        Some(b't' | b'f') => "a boolean",
        Some(b'n') => "null",
        _ => "a number",
    }
}

/// Puts the client's id back into the methods' answer in place of the stand-in.
fn restore_id(answer: &str, stand_in: u64, id: &str) -> String {
    // jsonrpsee writes `jsonrpc` then `id` first; splicing avoids re-reading large answers.
    let prefix = format!(r#"{{"jsonrpc":"2.0","id":{stand_in},"#);
    if let Some(rest) = answer.strip_prefix(&prefix) {
        return format!(r#"{{"jsonrpc":"2.0","id":{id},{rest}"#);
    }
    // Any other writer: read the members and write them again, the id replaced.
    let Ok(members) = serde_json::from_str::<HashMap<String, &RawValue>>(answer) else {
        return answer.to_owned();
    };
    let mut names: Vec<&String> = members.keys().collect();
    names.sort_by_key(|name| match name.as_str() {
        "jsonrpc" => 0,
        "id" => 1,
        _ => 2,
    });
    let body: Vec<String> = names
        .into_iter()
        .map(|name| {
            let value = if name == "id" { id } else { members[name].get() };
            format!("{}:{value}", serde_json::Value::from(name.as_str()))
        })
        .collect();
    format!("{{{}}}", body.join(","))
}

impl Dispatcher {
    pub(super) fn new(methods: Methods) -> Dispatcher {
        let known = methods.method_names().map(str::to_owned).collect();
        Dispatcher {
            inner: Arc::new(Inner {
                methods,
                known,
                next_stand_in: AtomicU64::new(1),
            }),
        }
    }

    /// Answers one message: a request, a notification or a batch.
    pub(super) async fn answer(&self, body: &[u8], via: Via) -> Answer {
        let mut answer = Answer {
            reply: None,
            subscriptions: Vec::new(),
        };
        let Ok(text) = std::str::from_utf8(body) else {
            answer.reply = Some(parse_error(
                "parse error: the message is not UTF-8 text; JSON-RPC messages are JSON",
            ));
            return answer;
        };
        let message: &RawValue = match serde_json::from_str(text) {
            Ok(message) => message,
            Err(error) => {
                answer.reply = Some(parse_error(&format!("parse error: the message is not JSON ({error})")));
                return answer;
            }
        };
        let message = message.get().trim();
        if !message.starts_with('[') {
            let (reply, subscription) = self.answer_one(message, via).await;
            answer.reply = reply;
            answer.subscriptions.extend(subscription);
            return answer;
        }
        let entries: Vec<&RawValue> = serde_json::from_str(message).unwrap_or_default();
        if entries.is_empty() {
            answer.reply = Some(error_reply(
                "null",
                INVALID_REQUEST,
                "an empty batch: send one request object, or an array of at least one",
                None,
            ));
            return answer;
        }
        if entries.len() > MAX_BATCH_ENTRIES {
            answer.reply = Some(error_reply(
                "null",
                INVALID_REQUEST,
                &format!(
                    "a batch of {} requests is over the limit of {MAX_BATCH_ENTRIES}; send it in smaller batches",
                    entries.len()
                ),
                None,
            ));
            return answer;
        }
        // Entries run concurrently, as separate requests would; answers keep the batch's order.
        let answers =
            futures_util::future::join_all(entries.iter().map(|entry| self.answer_one(entry.get(), via))).await;
        let mut replies = Vec::new();
        for (reply, subscription) in answers {
            replies.extend(reply);
            answer.subscriptions.extend(subscription);
        }
        if !replies.is_empty() {
            answer.reply = Some(format!("[{}]", replies.join(",")));
        }
        answer
    }

    /// Answers one request object; `None` for a notification.
    async fn answer_one(&self, request: &str, via: Via) -> (Option<String>, Option<Notifications>) {
        let invalid = |message: &str| (Some(error_reply("null", INVALID_REQUEST, message, None)), None);
        if !request.starts_with('{') {
            return invalid(&format!(
                "a request must be a JSON object with jsonrpc, method and id members, not {}",
                kind_of(request)
            ));
        }
        let Ok(members) = serde_json::from_str::<HashMap<String, &RawValue>>(request) else {
            return invalid("the request object could not be read");
        };
        // An id is a string, a number or null (specification, section 4); without one the
        // request is a notification and gets no answer.
        let id = match members.get("id").map(|raw| raw.get()) {
            None => None,
            Some(raw) => match raw.as_bytes().first() {
                Some(b'"' | b'-' | b'0'..=b'9' | b'n') => Some(raw),
                _ => {
                    return invalid(&format!(
                        "the id must be a string, a number or null, not {}",
                        kind_of(raw)
                    ))
                }
            },
        };
        let reply_id = id.unwrap_or("null");
        let refuse = |code: i32, message: &str, data: Option<serde_json::Value>| {
            (Some(error_reply(reply_id, code, message, data)), None)
        };
        let version = members
            .get("jsonrpc")
            .and_then(|raw| serde_json::from_str::<String>(raw.get()).ok());
        if version.as_deref() != Some("2.0") {
            return refuse(
                INVALID_REQUEST,
                r#"the request must say "jsonrpc": "2.0" (JSON-RPC 2.0)"#,
                None,
            );
        }
        let Some(method) = members
            .get("method")
            .and_then(|raw| serde_json::from_str::<String>(raw.get()).ok())
        else {
            return refuse(
                INVALID_REQUEST,
                "the request must name its method as a string; rpc.discover lists every method",
                None,
            );
        };
        let Some(callback) = self.inner.methods.method(&method) else {
            if id.is_none() {
                return (None, None);
            }
            let error = method_not_found(&method, &self.inner.known);
            return refuse(
                error.code(),
                error.message(),
                error.data().map(|d| serde_json::json!(d)),
            );
        };
        if via == Via::Http
            && matches!(
                callback,
                MethodCallback::Subscription(_) | MethodCallback::Unsubscription(_)
            )
        {
            return refuse(
                INVALID_REQUEST,
                &format!("{method} needs a connection that stays open: use the WebSocket at the same address (or stdio); over HTTP, poll analysis.progress"),
                None,
            );
        }
        let stand_in = self.inner.next_stand_in.fetch_add(1, Ordering::Relaxed);
        let params = members
            .get("params")
            .map(|raw| format!(r#","params":{}"#, raw.get()))
            .unwrap_or_default();
        let method_json = serde_json::Value::from(method.as_str());
        let call = format!(r#"{{"jsonrpc":"2.0","id":{stand_in},"method":{method_json}{params}}}"#);
        let (response, notifications) = match self.inner.methods.raw_json_request(&call, NOTIFICATION_BUFFER).await {
            Ok(answer) => answer,
            Err(error) => {
                return refuse(
                    INVALID_REQUEST,
                    &format!("the request could not be read: {error}"),
                    None,
                )
            }
        };
        let Some(id) = id else {
            return (None, None);
        };
        // Only a subscription keeps its channel open (or has events waiting in it).
        let open = !(notifications.is_closed() && notifications.is_empty());
        let mut reply = restore_id(response.get(), stand_in, id);
        if reply.len() > MAX_RESPONSE_BYTES as usize {
            let error = ServiceError::new(
                ErrorKind::ResourceLimit,
                format!(
                    "the answer to {method} is {} bytes, over the limit of {MAX_RESPONSE_BYTES}; ask for less (for dataset.rows, a smaller limit)",
                    reply.len()
                ),
            );
            reply = error_reply(id, error.kind.code(), &error.message, Some(error.data()));
        }
        (Some(reply), open.then_some(notifications))
    }
}

/// What became of a message given to [`Session::start_or_answer`].
pub(super) enum Started {
    /// Answered at once: the reply to write (none for notifications).
    Answered(Option<String>),
    /// Running as its own task, which sends its reply to the session's output.
    Running,
}

/// Sends a call's reply to the connection's output, then forwards the notifications of the
/// subscriptions it opened.
async fn deliver(answer: Answer, output: mpsc::Sender<String>, forwarders: Arc<Mutex<JoinSet<()>>>) {
    if let Some(reply) = answer.reply {
        if output.send(reply).await.is_err() {
            return;
        }
    }
    if answer.subscriptions.is_empty() {
        return;
    }
    // The answer went first, so the client knows a subscription's id before its events.
    let mut forwarders = forwarders.lock().unwrap_or_else(|poisoned| poisoned.into_inner());
    while forwarders.try_join_next().is_some() {}
    for mut notifications in answer.subscriptions {
        let output = output.clone();
        forwarders.spawn(async move {
            while let Some(notification) = notifications.recv().await {
                if output.send(notification.get().to_owned()).await.is_err() {
                    break;
                }
            }
        });
    }
}

/// The calls of one connection. Dropping the session drops the futures of every call still
/// running (a closed WebSocket); [`Session::finish`] lets them answer first (stdin's end).
pub(super) struct Session {
    dispatcher: Dispatcher,
    via: Via,
    output: mpsc::Sender<String>,
    calls: JoinSet<()>,
    /// Subscriptions' forwarders: they end with the session, not with the call that opened them.
    forwarders: Arc<Mutex<JoinSet<()>>>,
    in_flight: Arc<Semaphore>,
}

impl Session {
    pub(super) fn new(dispatcher: Dispatcher, via: Via, output: mpsc::Sender<String>) -> Session {
        Session {
            dispatcher,
            via,
            output,
            calls: JoinSet::new(),
            forwarders: Arc::new(Mutex::new(JoinSet::new())),
            in_flight: Arc::new(Semaphore::new(MAX_CALLS_IN_FLIGHT)),
        }
    }

    /// Starts answering one message; waits while the connection has too many calls running.
    pub(super) async fn start(&mut self, body: Vec<u8>) {
        if let Started::Answered(Some(reply)) = self.start_or_answer(body).await {
            let _ = self.output.send(reply).await;
        }
    }

    /// Answers one message at once if it can be (a cheap method answers the first time its
    /// future is polled), or starts it as its own task. An answer given at once is returned
    /// for the caller to write: it skips the hand-over to a task and from it to the writer,
    /// two wake-ups that cost more than such a call itself.
    pub(super) async fn start_or_answer(&mut self, body: Vec<u8>) -> Started {
        while self.calls.try_join_next().is_some() {}
        let (dispatcher, via) = (self.dispatcher.clone(), self.via);
        let mut call = Box::pin(async move { dispatcher.answer(&body, via).await });
        // Polled once here, with this task's waker: if it is not ready it moves to its own
        // task below, which polls it from then on (a boxed future may move once polled).
        // The permit first, so that no more than MAX_CALLS_IN_FLIGHT calls ever run.
        let Ok(permit) = self.in_flight.clone().acquire_owned().await else {
            return Started::Running;
        };
        let first = std::future::poll_fn(|context| Poll::Ready(call.as_mut().poll(context))).await;
        if let Poll::Ready(answer) = first {
            drop(permit);
            if answer.subscriptions.is_empty() {
                return Started::Answered(answer.reply);
            }
            // The answer goes before the notifications of the subscriptions it opened.
            let (output, forwarders) = (self.output.clone(), self.forwarders.clone());
            self.calls.spawn(deliver(answer, output, forwarders));
            return Started::Running;
        }
        let (output, forwarders) = (self.output.clone(), self.forwarders.clone());
        self.calls.spawn(async move {
            let answer = call.await;
            drop(permit);
            deliver(answer, output, forwarders).await;
        });
        Started::Running
    }

    /// Sends a reply that did not come from a call (a refused frame).
    pub(super) async fn send(&self, reply: String) {
        let _ = self.output.send(reply).await;
    }

    /// Lets every running call answer, then ends the subscriptions.
    pub(super) async fn finish(mut self) {
        while self.calls.join_next().await.is_some() {}
        self.forwarders
            .lock()
            .unwrap_or_else(|poisoned| poisoned.into_inner())
            .abort_all();
    }
}

/// The JSON-RPC code of an unknown method (kept: clients recognise it).
pub const METHOD_NOT_FOUND: i32 = -32601;

/// The error for a method the daemon does not serve: names it and the closest ones.
pub fn method_not_found(asked: &str, known: &[String]) -> ErrorObjectOwned {
    let closest = crate::suggest::closest_names(asked, known.iter().map(String::as_str));
    let message = if closest.is_empty() {
        format!("no method named `{asked}`; rpc.discover lists every method")
    } else {
        format!("no method named `{asked}`; did you mean {}?", closest.join(", "))
    };
    ErrorObjectOwned::owned(
        METHOD_NOT_FOUND,
        message,
        Some(serde_json::json!({
            "kind": "method_not_found",
            "method": asked,
            "closest": closest,
            "help": "rpc.discover lists every method with its parameters",
        })),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use jsonrpsee::RpcModule;
    use serde_json::Value;

    fn dispatcher() -> Dispatcher {
        let mut module = RpcModule::new(());
        module
            .register_method("echo", |params, _, _| params.parse::<Value>().unwrap_or(Value::Null))
            .unwrap();
        Dispatcher::new(module.into())
    }

    async fn ask(body: &str) -> Option<String> {
        dispatcher().answer(body.as_bytes(), Via::Stdio).await.reply
    }

    #[tokio::test]
    async fn every_id_the_specification_allows_comes_back_verbatim() {
        for id in [
            "-1",
            "1.5",
            "18446744073709551616",
            "1e400",
            "0",
            "null",
            r#""a""#,
            "1.0E+2",
            r#""\u00e9""#,
        ] {
            let reply = ask(&format!(
                r#"{{"jsonrpc":"2.0","id":{id},"method":"echo","params":[1]}}"#
            ))
            .await
            .unwrap();
            assert_eq!(reply, format!(r#"{{"jsonrpc":"2.0","id":{id},"result":[1]}}"#));
        }
    }

    #[tokio::test]
    async fn ids_the_specification_disallows_are_invalid_requests_with_id_null() {
        for id in ["{}", "[1]", "true", "false"] {
            let reply = ask(&format!(r#"{{"jsonrpc":"2.0","id":{id},"method":"echo"}}"#))
                .await
                .unwrap();
            let reply: Value = serde_json::from_str(&reply).unwrap();
            assert_eq!(reply["id"], Value::Null, "{reply}");
            assert_eq!(reply["error"]["code"], INVALID_REQUEST, "{reply}");
        }
    }

    #[tokio::test]
    async fn batches_are_answered_as_section_6_says() {
        let empty: Value = serde_json::from_str(&ask("[]").await.unwrap()).unwrap();
        assert_eq!(empty["error"]["code"], INVALID_REQUEST);
        assert_eq!(empty["id"], Value::Null);
        let three: Value = serde_json::from_str(&ask("[1,2,3]").await.unwrap()).unwrap();
        assert_eq!(three.as_array().unwrap().len(), 3);
        assert!(three
            .as_array()
            .unwrap()
            .iter()
            .all(|e| e["error"]["code"] == INVALID_REQUEST));
        let object: Value = serde_json::from_str(&ask("{}").await.unwrap()).unwrap();
        assert_eq!(object["error"]["code"], INVALID_REQUEST);
        assert!(ask(r#"[{"jsonrpc":"2.0","method":"echo"}]"#).await.is_none());
        assert!(ask(r#"{"jsonrpc":"2.0","method":"echo"}"#).await.is_none());
        let mixed: Value = serde_json::from_str(
            &ask(r#"[{"jsonrpc":"2.0","method":"echo"},{"jsonrpc":"2.0","id":-7,"method":"echo","params":{"a":1}},5]"#)
                .await
                .unwrap(),
        )
        .unwrap();
        assert_eq!(mixed[0]["id"], -7);
        assert_eq!(mixed[0]["result"]["a"], 1);
        assert_eq!(mixed[1]["error"]["code"], INVALID_REQUEST);
        let garbage: Value = serde_json::from_str(&ask("{\"jsonrpc\":").await.unwrap()).unwrap();
        assert_eq!(garbage["error"]["code"], PARSE_ERROR);
    }

    #[test]
    fn an_answer_in_another_member_order_still_gets_its_id_back() {
        let restored = restore_id(r#"{"result":[1],"id":5,"jsonrpc":"2.0"}"#, 5, "1e400");
        assert_eq!(restored, r#"{"jsonrpc":"2.0","id":1e400,"result":[1]}"#);
    }
}
