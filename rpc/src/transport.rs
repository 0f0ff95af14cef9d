//! How requests reach the methods: HTTP and WebSocket on one port, or stdio with
//! `Content-Length` framing as language servers use.
//!
//! A web page must not be able to drive a local daemon: browsers attach an `Origin`
//! header to cross-site requests and to every WebSocket handshake, so requests carrying an
//! Origin that is not explicitly allowed (`--allow-origin`) are refused. Clients that are
//! not browsers (the CLI, curl, notebooks' HTTP libraries) send no Origin and pass. When
//! the daemon listens beyond loopback it requires `Authorization: Bearer <token>`.
//!
//! Pages of an allowed origin get what browsers need to read the answers (CORS): their
//! preflight is answered here, before the token check (browsers send no credentials with a
//! preflight), and every answer names the origin in `Access-Control-Allow-Origin`. Browser
//! WebSockets cannot set headers, so a page reaching a token-protected daemon uses HTTP.

use jsonrpsee::server::middleware::rpc::{
    Batch, BatchEntry, BatchEntryErr, Notification, RpcServiceBuilder, RpcServiceT,
};
use jsonrpsee::server::{HttpBody, HttpRequest, HttpResponse, MethodResponse, Server, ServerConfig, ServerHandle};
use jsonrpsee::types::{ErrorObjectOwned, Request};
use jsonrpsee::RpcModule;
use std::future::Future;
use std::net::SocketAddr;
use std::pin::Pin;
use std::sync::Arc;
use std::task::{Context, Poll};
use tokio::io::{AsyncBufReadExt, AsyncReadExt, AsyncWrite, AsyncWriteExt, BufReader};
use tokio::sync::mpsc::{unbounded_channel, UnboundedSender};
use tokio::sync::Mutex;
use tokio::task::JoinSet;

/// Largest request body the HTTP transport accepts (inline imports are the large ones).
pub const MAX_REQUEST_BYTES: u32 = 64 * 1024 * 1024;
/// Largest response body (a page of `dataset.rows`).
pub const MAX_RESPONSE_BYTES: u32 = 256 * 1024 * 1024;
/// Simultaneous connections.
pub const MAX_CONNECTIONS: u32 = 64;
/// Largest stdio frame.
pub const MAX_STDIO_FRAME_BYTES: usize = 64 * 1024 * 1024;

/// Who may call over HTTP and WebSocket.
#[derive(Debug, Clone, Default)]
pub struct AccessPolicy {
    pub allowed_origins: Vec<String>,
    pub token: Option<String>,
}

/// What the access layer decided about a request.
enum Verdict {
    Pass,
    /// A browser's CORS preflight from an allowed origin: answered here, before the token
    /// check, because browsers never send credentials with a preflight.
    Preflight(String),
    Refuse(u16, String),
}

impl AccessPolicy {
    /// The request's Origin header, if it has one.
    fn origin(request: &HttpRequest<impl Sized>) -> Option<String> {
        request
            .headers()
            .get("origin")
            .map(|origin| origin.to_str().unwrap_or("").to_owned())
    }

    fn judge(&self, request: &HttpRequest<impl Sized>) -> Verdict {
        if let Some(origin) = Self::origin(request) {
            if !self
                .allowed_origins
                .iter()
                .any(|allowed| *allowed == origin || allowed == "*")
            {
                return Verdict::Refuse(
                    403,
                    format!("requests from origin {origin} are not allowed; start mobilisd with --allow-origin {origin} to allow this page"),
                );
            }
            if request.method() == http::Method::OPTIONS {
                return Verdict::Preflight(origin);
            }
        }
        match self.check_token(request) {
            Some((status, message)) => Verdict::Refuse(status, message),
            None => Verdict::Pass,
        }
    }

    /// `None` when the request carries the token (or none is required), else the refusal.
    fn check_token(&self, request: &HttpRequest<impl Sized>) -> Option<(u16, String)> {
        if let Some(token) = &self.token {
            let presented = request
                .headers()
                .get("authorization")
                .and_then(|v| v.to_str().ok())
                .and_then(|v| v.strip_prefix("Bearer "));
            if presented != Some(token.as_str()) {
                return Some((
                    401,
                    "this daemon requires the header `Authorization: Bearer <token>`".into(),
                ));
            }
        }
        None
    }
}

/// Tower layer applying an [`AccessPolicy`] before any JSON-RPC processing.
#[derive(Clone)]
pub struct AccessLayer(Arc<AccessPolicy>);

impl<S> tower::Layer<S> for AccessLayer {
    type Service = AccessService<S>;
    fn layer(&self, inner: S) -> Self::Service {
        AccessService {
            inner,
            policy: self.0.clone(),
        }
    }
}

#[derive(Clone)]
pub struct AccessService<S> {
    inner: S,
    policy: Arc<AccessPolicy>,
}

type BoxError = Box<dyn std::error::Error + Send + Sync>;

impl<S, B> tower::Service<HttpRequest<B>> for AccessService<S>
where
    S: tower::Service<HttpRequest<B>, Response = HttpResponse>,
    S::Error: Into<BoxError> + 'static,
    S::Future: Send + 'static,
{
    type Response = HttpResponse;
    type Error = BoxError;
    type Future = Pin<Box<dyn Future<Output = Result<HttpResponse, BoxError>> + Send>>;

    fn poll_ready(&mut self, cx: &mut Context<'_>) -> Poll<Result<(), Self::Error>> {
        self.inner.poll_ready(cx).map_err(Into::into)
    }

    fn call(&mut self, request: HttpRequest<B>) -> Self::Future {
        let (status, message) = match self.policy.judge(&request) {
            Verdict::Pass if is_plain_visit(&request) => {
                return Box::pin(async move { Ok(self_description()) });
            }
            Verdict::Pass => {
                // An allowed page may read the answer (CORS); other clients send no Origin.
                let origin = AccessPolicy::origin(&request);
                let future = self.inner.call(request);
                return Box::pin(async move {
                    let mut response = future.await.map_err(Into::into)?;
                    if let Some(origin) = origin.and_then(|o| http::HeaderValue::from_str(&o).ok()) {
                        let headers = response.headers_mut();
                        headers.insert("access-control-allow-origin", origin);
                        headers.insert("vary", http::HeaderValue::from_static("Origin"));
                    }
                    Ok(response)
                });
            }
            Verdict::Preflight(origin) => {
                let response = HttpResponse::builder()
                    .status(204)
                    .header("access-control-allow-origin", origin)
                    .header("access-control-allow-methods", "POST, OPTIONS")
                    .header("access-control-allow-headers", "content-type, authorization")
                    .header("access-control-max-age", "600")
                    .header("vary", "Origin")
                    .body(HttpBody::from(""))
                    .expect("static response parts are valid");
                return Box::pin(async move { Ok(response) });
            }
            Verdict::Refuse(status, message) => (status, message),
        };
        tracing::warn!(status, %message, "request refused");
        let body = serde_json::json!({
            "jsonrpc": "2.0",
            "id": null,
            "error": {"code": -32600, "message": message}
        })
        .to_string();
        let response = HttpResponse::builder()
            .status(status)
            .header("content-type", "application/json")
            .body(HttpBody::from(body))
            .expect("static response parts are valid");
        Box::pin(async move { Ok(response) })
    }
}

/// A GET of `/` that is not a WebSocket upgrade: a person (or a script) asking what answers
/// on this port. JSON-RPC itself arrives by POST or over the WebSocket.
fn is_plain_visit<B>(request: &HttpRequest<B>) -> bool {
    request.method() == http::Method::GET
        && request.uri().path() == "/"
        && !request.headers().contains_key(http::header::UPGRADE)
}

/// What this port is and where its documentation is, as a short JSON document.
fn self_description() -> HttpResponse {
    let body = serde_json::json!({
        "name": "mobilisd",
        "version": env!("CARGO_PKG_VERSION"),
        "what": "the mobilis analysis server for resistivity, Hall-effect, multi-carrier and magnetoresistance measurements",
        "protocol": "JSON-RPC 2.0: POST a request to this address, or open a WebSocket here",
        "discover": "call rpc.discover for the OpenRPC document of every method and analysis.list for the analyses",
        "docs": "README.md (using it) and DEVELOPERS.md (methods, tables, plugins) in the mobilis source tree"
    })
    .to_string();
    HttpResponse::builder()
        .status(200)
        .header("content-type", "application/json")
        .body(HttpBody::from(body))
        .expect("static response parts are valid")
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

/// RPC middleware answering calls of unknown methods with [`method_not_found`] (jsonrpsee's
/// own answer names neither the method nor what was meant).
#[derive(Clone)]
pub struct KnownMethods<S> {
    service: S,
    known: Arc<Vec<String>>,
}

impl<S> KnownMethods<S> {
    fn refusal(&self, method: &str) -> Option<ErrorObjectOwned> {
        (!self.known.iter().any(|known| known == method)).then(|| method_not_found(method, &self.known))
    }
}

impl<S> RpcServiceT for KnownMethods<S>
where
    S: RpcServiceT<
            MethodResponse = MethodResponse,
            BatchResponse = MethodResponse,
            NotificationResponse = MethodResponse,
        > + Send
        + Sync
        + Clone
        + 'static,
{
    type MethodResponse = MethodResponse;
    type NotificationResponse = MethodResponse;
    type BatchResponse = MethodResponse;

    fn call<'a>(&self, request: Request<'a>) -> impl Future<Output = Self::MethodResponse> + Send + 'a {
        let refusal = self.refusal(request.method_name());
        let service = self.service.clone();
        async move {
            match refusal {
                Some(error) => MethodResponse::error(request.id, error).with_extensions(request.extensions),
                None => service.call(request).await,
            }
        }
    }

    fn batch<'a>(&self, mut batch: Batch<'a>) -> impl Future<Output = Self::BatchResponse> + Send + 'a {
        for entry in batch.iter_mut() {
            let refusal = match entry {
                Ok(BatchEntry::Call(request)) => self
                    .refusal(request.method_name())
                    .map(|error| (request.id.clone(), error)),
                _ => None,
            };
            if let Some((id, error)) = refusal {
                *entry = Err(BatchEntryErr::new(id, error));
            }
        }
        self.service.batch(batch)
    }

    fn notification<'a>(
        &self,
        notification: Notification<'a>,
    ) -> impl Future<Output = Self::NotificationResponse> + Send + 'a {
        self.service.notification(notification)
    }
}

/// Starts the HTTP and WebSocket server; returns its address and handle.
pub async fn serve_http<C: Send + Sync + 'static>(
    address: SocketAddr,
    module: RpcModule<C>,
    policy: AccessPolicy,
) -> std::io::Result<(SocketAddr, ServerHandle)> {
    let middleware = tower::ServiceBuilder::new().layer(AccessLayer(Arc::new(policy)));
    let config = ServerConfig::builder()
        .max_request_body_size(MAX_REQUEST_BYTES)
        .max_response_body_size(MAX_RESPONSE_BYTES)
        .max_connections(MAX_CONNECTIONS)
        .build();
    let known: Arc<Vec<String>> = Arc::new(module.method_names().map(str::to_owned).collect());
    let rpc_middleware = RpcServiceBuilder::new().layer_fn(move |service| KnownMethods {
        service,
        known: known.clone(),
    });
    let server = Server::builder()
        .set_config(config)
        .set_http_middleware(middleware)
        .set_rpc_middleware(rpc_middleware)
        .build(address)
        .await?;
    let local = server.local_addr()?;
    Ok((local, server.start(module)))
}

async fn write_frame(output: &mut (impl AsyncWrite + Unpin), body: &str) -> std::io::Result<()> {
    output
        .write_all(format!("Content-Length: {}\r\n\r\n", body.len()).as_bytes())
        .await?;
    output.write_all(body.as_bytes()).await?;
    output.flush().await
}

fn error_response(code: i32, message: &str) -> String {
    serde_json::json!({"jsonrpc": "2.0", "id": null, "error": {"code": code, "message": message}}).to_string()
}

type Notifications = tokio::sync::mpsc::Receiver<Box<serde_json::value::RawValue>>;

/// Answers one request, with the channel of its notifications when it opened a
/// subscription. A notification (no id) gets no response.
async fn answer_one<C: Send + Sync + 'static>(
    module: &RpcModule<C>,
    request: &serde_json::Value,
) -> Option<(String, Option<Notifications>)> {
    let id = request.get("id")?;
    if let Some(method) = request.get("method").and_then(serde_json::Value::as_str) {
        if !module.method_names().any(|known| known == method) {
            let known: Vec<String> = module.method_names().map(str::to_owned).collect();
            let error = method_not_found(method, &known);
            let answer = serde_json::json!({"jsonrpc": "2.0", "id": id, "error": error});
            return Some((answer.to_string(), None));
        }
    }
    match module.raw_json_request(&request.to_string(), 16).await {
        Ok((response, notifications)) => {
            // Only a subscription keeps its channel open (or has events waiting in it).
            let open = !(notifications.is_closed() && notifications.is_empty());
            Some((response.get().to_owned(), open.then_some(notifications)))
        }
        Err(_) => Some((error_response(-32600, "invalid request"), None)),
    }
}

/// Answers a frame's body (one request or a batch) and then forwards the notifications of
/// any subscription it opened, so that a client learns a subscription's id before its events.
async fn answer_body<C: Send + Sync + 'static>(
    module: &RpcModule<C>,
    body: &[u8],
    output: &UnboundedSender<String>,
    forwarders: &Mutex<JoinSet<()>>,
) {
    let parsed: serde_json::Value = match serde_json::from_slice(body) {
        Ok(value) => value,
        Err(_) => {
            let _ = output.send(error_response(-32700, "parse error: the body is not JSON"));
            return;
        }
    };
    let mut subscriptions = Vec::new();
    let reply = match &parsed {
        serde_json::Value::Array(batch) => {
            let mut answers = Vec::new();
            for request in batch {
                if let Some((answer, notifications)) = answer_one(module, request).await {
                    answers.push(answer);
                    subscriptions.extend(notifications);
                }
            }
            (!answers.is_empty()).then(|| format!("[{}]", answers.join(",")))
        }
        request => answer_one(module, request).await.map(|(answer, notifications)| {
            subscriptions.extend(notifications);
            answer
        }),
    };
    if let Some(reply) = reply {
        let _ = output.send(reply);
    }
    if subscriptions.is_empty() {
        return;
    }
    let mut forwarders = forwarders.lock().await;
    while forwarders.try_join_next().is_some() {}
    for mut notifications in subscriptions {
        let output = output.clone();
        forwarders.spawn(async move {
            while let Some(notification) = notifications.recv().await {
                if output.send(notification.get().to_owned()).is_err() {
                    break;
                }
            }
        });
    }
}

/// What the reader found next on stdin.
enum Frame {
    Body(Vec<u8>),
    /// A frame the reader could not take; the text is the error response to send.
    Refused(String),
    End,
}

async fn read_frame(input: &mut (impl AsyncBufReadExt + Unpin)) -> std::io::Result<Frame> {
    let mut content_length: Option<usize> = None;
    loop {
        let mut line = String::new();
        if input.read_line(&mut line).await? == 0 {
            return Ok(Frame::End);
        }
        let line = line.trim_end_matches(['\r', '\n']);
        if line.is_empty() {
            break;
        }
        if let Some((name, value)) = line.split_once(':') {
            if name.trim().eq_ignore_ascii_case("content-length") {
                content_length = value.trim().parse().ok();
            }
        }
    }
    let Some(length) = content_length else {
        return Ok(Frame::Refused(error_response(-32700, "missing Content-Length header")));
    };
    if length > MAX_STDIO_FRAME_BYTES {
        // Skip the body so the stream stays in step, then refuse.
        tokio::io::copy(&mut input.take(length as u64), &mut tokio::io::sink()).await?;
        return Ok(Frame::Refused(error_response(
            -32600,
            &format!("message of {length} bytes exceeds {MAX_STDIO_FRAME_BYTES}"),
        )));
    }
    let mut body = vec![0u8; length];
    input.read_exact(&mut body).await?;
    Ok(Frame::Body(body))
}

/// Serves JSON-RPC over stdin and stdout until stdin closes. Each message is
/// `Content-Length: N\r\n\r\n` followed by N bytes of JSON; batches are answered as batches.
///
/// Requests are handled concurrently, as over a WebSocket: an editor can subscribe to a
/// call's progress, start the call and cancel it while it runs. Responses and notifications
/// share stdout through one writer so that frames never interleave. When stdin closes, the
/// requests in flight are answered before the daemon exits.
pub async fn serve_stdio<C: Send + Sync + 'static>(module: RpcModule<C>) -> std::io::Result<()> {
    let module = Arc::new(module);
    let (output, mut outgoing) = unbounded_channel::<String>();
    let writer = tokio::spawn(async move {
        let mut stdout = tokio::io::stdout();
        while let Some(body) = outgoing.recv().await {
            write_frame(&mut stdout, &body).await?;
        }
        Ok::<_, std::io::Error>(())
    });
    let forwarders = Arc::new(Mutex::new(JoinSet::new()));
    let mut requests = JoinSet::new();
    let mut input = BufReader::new(tokio::io::stdin());
    loop {
        match read_frame(&mut input).await? {
            Frame::End => break,
            Frame::Refused(reply) => {
                let _ = output.send(reply);
            }
            Frame::Body(body) => {
                while requests.try_join_next().is_some() {}
                let (module, output, forwarders) = (module.clone(), output.clone(), forwarders.clone());
                requests.spawn(async move { answer_body(&module, &body, &output, &forwarders).await });
            }
        }
    }
    while requests.join_next().await.is_some() {}
    // Subscriptions still waiting for events end with the session.
    forwarders.lock().await.abort_all();
    drop(output);
    writer.await.map_err(std::io::Error::other)?
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unknown_methods_are_named_with_the_closest_known_ones() {
        let known: Vec<String> = crate::openrpc::METHODS.iter().map(|m| m.name.to_owned()).collect();
        let closest = |asked: &str| crate::suggest::closest_names(asked, known.iter().map(String::as_str));
        assert_eq!(closest("dataset.lst")[0], "dataset.list");
        assert_eq!(closest("datasets.list")[0], "dataset.list");
        assert_eq!(closest("import"), vec!["dataset.import"]);
        assert_eq!(closest("analysis.runn")[0], "analysis.run");
        assert!(closest("frobnicate").is_empty());
        let error = method_not_found("dataset.lst", &known);
        assert_eq!(error.code(), METHOD_NOT_FOUND);
        assert!(error
            .message()
            .starts_with("no method named `dataset.lst`; did you mean dataset.list"));
        assert_eq!(
            method_not_found("frobnicate", &known).message(),
            "no method named `frobnicate`; rpc.discover lists every method"
        );
    }
}
