//! HTTP (one request per POST, keep-alive) and WebSocket on one port, served with hyper and
//! soketto so that each call's future belongs to its connection: hyper drops a request's
//! future when its client disconnects, and a WebSocket's calls live in a set that is
//! aborted when the socket closes. Either way a method stops being polled as soon as
//! nobody waits for its answer.
//!
//! Cheap calls cost what the connection's own task does: an HTTP request is answered on it
//! by hyper, and a WebSocket message whose call is ready at once is answered by the socket's
//! reader, over a buffered connection, so a round trip is one read, one write and one
//! wake-up of the daemon (see [`serve_websocket`]).

use super::access::{self, AccessPolicy, Body, Verdict};
use super::limits::{MAX_CONNECTIONS, MAX_REQUEST_BYTES};
use super::messages::{Dispatcher, Session, Started, Via};
use bytes::Bytes;
use http_body_util::{BodyExt, Full, Limited};
use hyper::body::Incoming;
use hyper_util::rt::TokioIo;
use jsonrpsee::RpcModule;
use std::convert::Infallible;
use std::net::SocketAddr;
use std::sync::Arc;
use tokio::io::BufStream;
use tokio::net::{TcpListener, TcpStream};
use tokio::sync::{mpsc, watch, OwnedSemaphorePermit, Semaphore};
use tokio::task::JoinSet;
use tokio_util::compat::TokioAsyncReadCompatExt;

/// Stops the server and tells when it has stopped.
#[derive(Clone)]
pub struct ServerHandle {
    stop: Arc<watch::Sender<bool>>,
    finished: watch::Receiver<bool>,
}

impl ServerHandle {
    /// Asks the server to stop accepting and to close its connections.
    pub fn stop(&self) {
        self.stop.send_replace(true);
    }

    /// Waits until the server has stopped.
    pub async fn stopped(mut self) {
        while !*self.finished.borrow() {
            if self.finished.changed().await.is_err() {
                return;
            }
        }
    }
}

/// An upgraded connection as soketto reads and writes it. Buffered both ways: soketto reads
/// a frame's header, mask and payload with one call each and writes a header and its
/// payload with two, which unbuffered were as many system calls, and two TCP segments per
/// answer (the socket has `TCP_NODELAY`). Buffered, a message is one read and one write
/// (when the writer flushes).
type Socket = tokio_util::compat::Compat<BufStream<TokioIo<hyper::upgrade::Upgraded>>>;

/// What every connection shares.
struct Shared {
    dispatcher: Dispatcher,
    policy: AccessPolicy,
}

/// Starts the HTTP and WebSocket server; returns its address and handle.
pub async fn serve_http<C: Send + Sync + 'static>(
    address: SocketAddr,
    module: RpcModule<C>,
    policy: AccessPolicy,
) -> std::io::Result<(SocketAddr, ServerHandle)> {
    let listener = TcpListener::bind(address).await?;
    let local = listener.local_addr()?;
    let shared = Arc::new(Shared {
        dispatcher: Dispatcher::new(module.into()),
        policy,
    });
    let (stop, mut stop_asked) = watch::channel(false);
    let (finished_sender, finished) = watch::channel(false);
    tokio::spawn(async move {
        let slots = Arc::new(Semaphore::new(MAX_CONNECTIONS as usize));
        let mut connections = JoinSet::new();
        loop {
            tokio::select! {
                _ = stop_asked.changed() => break,
                accepted = listener.accept() => {
                    let stream = match accepted {
                        Ok((stream, _)) => stream,
                        Err(error) => {
                            // Out of file descriptors, for instance: wait rather than spin.
                            tracing::warn!(%error, "cannot accept a connection");
                            tokio::time::sleep(std::time::Duration::from_millis(50)).await;
                            continue;
                        }
                    };
                    while connections.try_join_next().is_some() {}
                    let _ = stream.set_nodelay(true);
                    match slots.clone().try_acquire_owned() {
                        Ok(slot) => {
                            connections.spawn(serve_connection(stream, shared.clone(), slot));
                        }
                        Err(_) => {
                            connections.spawn(refuse_connection(stream));
                        }
                    }
                }
            }
        }
        connections.abort_all();
        finished_sender.send_replace(true);
    });
    Ok((
        local,
        ServerHandle {
            stop: Arc::new(stop),
            finished,
        },
    ))
}

/// Answers a connection beyond [`MAX_CONNECTIONS`] with 503 and closes it.
async fn refuse_connection(stream: TcpStream) {
    let service = hyper::service::service_fn(|_request: http::Request<Incoming>| async {
        let mut response = access::refusal(
            503,
            &format!(
                "the daemon serves at most {MAX_CONNECTIONS} connections at once; close idle ones or retry shortly"
            ),
        );
        response
            .headers_mut()
            .insert(http::header::CONNECTION, http::HeaderValue::from_static("close"));
        Ok::<_, Infallible>(response)
    });
    let _ = hyper::server::conn::http1::Builder::new()
        .keep_alive(false)
        .serve_connection(TokioIo::new(stream), service)
        .await;
}

/// Serves one connection: HTTP requests, or a WebSocket after an upgrade. The connection's
/// slot is held until the connection (or its WebSocket) ends.
async fn serve_connection(stream: TcpStream, shared: Arc<Shared>, slot: OwnedSemaphorePermit) {
    let slot = Arc::new(slot);
    let service = hyper::service::service_fn(move |request| {
        let (shared, slot) = (shared.clone(), slot.clone());
        async move { Ok::<_, Infallible>(answer_request(request, shared, slot).await) }
    });
    // hyper keeps polling the connection while a request's future runs, and drops that
    // future when the peer closes: a call nobody waits for is no longer polled.
    if let Err(error) = hyper::server::conn::http1::Builder::new()
        .serve_connection(TokioIo::new(stream), service)
        .with_upgrades()
        .await
    {
        tracing::debug!(%error, "connection ended");
    }
}

async fn answer_request(
    request: http::Request<Incoming>,
    shared: Arc<Shared>,
    slot: Arc<OwnedSemaphorePermit>,
) -> http::Response<Body> {
    match shared.policy.judge(&request) {
        Verdict::Pass => {}
        Verdict::Preflight(origin) => return access::preflight(&origin),
        Verdict::Refuse(status, message) => return access::refusal(status, &message),
    }
    if access::is_plain_visit(&request) {
        return access::self_description();
    }
    let origin = AccessPolicy::origin(&request);
    let mut response = if soketto::handshake::http::is_upgrade_request(&request) {
        upgrade(request, shared, slot)
    } else {
        answer_post(request, &shared).await
    };
    access::allow_origin(&mut response, origin.as_deref());
    response
}

/// A JSON-RPC message by POST.
async fn answer_post(request: http::Request<Incoming>, shared: &Shared) -> http::Response<Body> {
    if request.method() != http::Method::POST {
        return access::refusal(
            405,
            "JSON-RPC arrives by POST, or over a WebSocket opened at this address",
        );
    }
    // Only a JSON body: a page cannot send one cross-site without a CORS preflight.
    let json = request
        .headers()
        .get(http::header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .is_some_and(|v| v.trim_start().to_ascii_lowercase().starts_with("application/json"));
    if !json {
        return access::refusal(415, "send the request with the header `Content-Type: application/json`");
    }
    let body = match Limited::new(request.into_body(), MAX_REQUEST_BYTES as usize)
        .collect()
        .await
    {
        Ok(body) => body.to_bytes(),
        Err(error) if error.is::<http_body_util::LengthLimitError>() => {
            return access::refusal(
                413,
                &format!("the request is over {MAX_REQUEST_BYTES} bytes; import large files by path"),
            );
        }
        Err(error) => return access::refusal(400, &format!("the request body could not be read: {error}")),
    };
    let answer = shared.dispatcher.answer(&body, Via::Http).await;
    match answer.reply {
        Some(reply) => access::json_response(200, reply),
        // Notifications only: nothing to say (JSON-RPC 2.0, section 4.1).
        None => http::Response::builder()
            .status(204)
            .body(Full::new(Bytes::new()))
            .expect("static response parts are valid"),
    }
}

/// Answers a WebSocket handshake (RFC 6455, section 4.2) and serves the socket once hyper
/// hands the connection over.
fn upgrade(
    request: http::Request<Incoming>,
    shared: Arc<Shared>,
    slot: Arc<OwnedSemaphorePermit>,
) -> http::Response<Body> {
    let mut handshake = soketto::handshake::http::Server::new();
    let response = match handshake.receive_request(&request) {
        Ok(response) => response,
        Err(error) => return access::refusal(400, &format!("not a WebSocket handshake: {error}")),
    };
    tokio::spawn(async move {
        let upgraded = match hyper::upgrade::on(request).await {
            Ok(upgraded) => upgraded,
            Err(error) => {
                tracing::debug!(%error, "WebSocket upgrade failed");
                return;
            }
        };
        let mut builder = handshake.into_builder(BufStream::new(TokioIo::new(upgraded)).compat());
        builder.set_max_message_size(MAX_REQUEST_BYTES as usize);
        builder.set_max_frame_size(MAX_REQUEST_BYTES as usize);
        let (sender, receiver) = builder.finish();
        serve_websocket(sender, receiver, shared.dispatcher.clone()).await;
        drop(slot);
    });
    response.map(|()| Full::new(Bytes::new()))
}

/// Reads messages until the socket closes, then drops the calls still running.
///
/// A call that answers at once (the cheap reads) is answered by this task itself, as hyper
/// answers an HTTP request on its connection's task; the others run as tasks of their own
/// and hand their answers to a writer task. Both write through one lock on the sender, so
/// frames never interleave.
async fn serve_websocket(
    sender: soketto::connection::Sender<Socket>,
    mut receiver: soketto::connection::Receiver<Socket>,
    dispatcher: Dispatcher,
) {
    let sender = Arc::new(tokio::sync::Mutex::new(sender));
    let (output, mut outgoing) = mpsc::channel::<String>(64);
    let writer_sender = sender.clone();
    let writer = tokio::spawn(async move {
        while let Some(text) = outgoing.recv().await {
            let mut sender = writer_sender.lock().await;
            if sender.send_text_owned(text).await.is_err() {
                return;
            }
            // Flush once the queue is drained, so a burst of answers leaves together.
            if outgoing.is_empty() && sender.flush().await.is_err() {
                return;
            }
        }
        let _ = writer_sender.lock().await.close().await;
    });
    let mut session = Session::new(dispatcher, Via::WebSocket, output);
    let mut message = Vec::new();
    loop {
        message.clear();
        match receiver.receive_data(&mut message).await {
            // Text and binary messages alike carry JSON.
            Ok(_) => match session.start_or_answer(std::mem::take(&mut message)).await {
                Started::Answered(Some(reply)) => {
                    let mut sender = sender.lock().await;
                    if sender.send_text_owned(reply).await.is_err() || sender.flush().await.is_err() {
                        break;
                    }
                }
                Started::Answered(None) | Started::Running => {}
            },
            Err(soketto::connection::Error::Closed) => break,
            Err(error) => {
                tracing::debug!(%error, "WebSocket ended");
                break;
            }
        }
    }
    // Dropping the session aborts its calls: their futures are dropped here.
    drop(session);
    let _ = writer.await;
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::atomic::{AtomicUsize, Ordering};
    use std::time::Duration;
    use tokio::io::AsyncWriteExt;

    /// Counts a future's drop.
    struct Dropped(Arc<AtomicUsize>);
    impl Drop for Dropped {
        fn drop(&mut self) {
            self.0.fetch_add(1, Ordering::SeqCst);
        }
    }

    /// A method that waits for an hour, counting its starts and its drops.
    async fn server_with_a_waiting_method() -> (SocketAddr, ServerHandle, Arc<AtomicUsize>, Arc<AtomicUsize>) {
        let (started, dropped) = (Arc::new(AtomicUsize::new(0)), Arc::new(AtomicUsize::new(0)));
        let mut module = RpcModule::new(());
        let (s, d) = (started.clone(), dropped.clone());
        module
            .register_async_method("wait", move |_, _, _| {
                let (started, dropped) = (s.clone(), d.clone());
                async move {
                    started.fetch_add(1, Ordering::SeqCst);
                    let _guard = Dropped(dropped);
                    tokio::time::sleep(Duration::from_secs(3600)).await;
                    "done"
                }
            })
            .unwrap();
        let (address, handle) = serve_http("127.0.0.1:0".parse().unwrap(), module, AccessPolicy::default())
            .await
            .unwrap();
        (address, handle, started, dropped)
    }

    async fn reaches(counter: &AtomicUsize, value: usize) -> bool {
        for _ in 0..200 {
            if counter.load(Ordering::SeqCst) >= value {
                return true;
            }
            tokio::time::sleep(Duration::from_millis(25)).await;
        }
        false
    }

    const WAIT: &str = r#"{"jsonrpc":"2.0","id":1,"method":"wait"}"#;

    #[tokio::test(flavor = "multi_thread")]
    async fn a_call_is_dropped_when_its_http_client_disconnects() {
        let (address, handle, started, dropped) = server_with_a_waiting_method().await;
        let mut stream = TcpStream::connect(address).await.unwrap();
        let request = format!(
            "POST / HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: {}\r\n\r\n{WAIT}",
            WAIT.len()
        );
        stream.write_all(request.as_bytes()).await.unwrap();
        assert!(reaches(&started, 1).await, "the call started");
        assert_eq!(dropped.load(Ordering::SeqCst), 0);
        drop(stream);
        assert!(
            reaches(&dropped, 1).await,
            "the call's future was dropped with its client"
        );
        handle.stop();
        handle.stopped().await;
    }

    #[tokio::test(flavor = "multi_thread")]
    async fn calls_are_dropped_when_their_websocket_closes() {
        let (address, handle, started, dropped) = server_with_a_waiting_method().await;
        let stream = TcpStream::connect(address).await.unwrap();
        let mut client = soketto::handshake::Client::new(stream.compat(), "localhost", "/");
        assert!(matches!(
            client.handshake().await.unwrap(),
            soketto::handshake::ServerResponse::Accepted { .. }
        ));
        let (mut sender, _receiver) = client.into_builder().finish();
        for _ in 0..3 {
            sender.send_text(WAIT).await.unwrap();
        }
        sender.flush().await.unwrap();
        assert!(reaches(&started, 3).await, "the calls started");
        drop(sender);
        drop(_receiver);
        assert!(
            reaches(&dropped, 3).await,
            "every call's future was dropped with the socket"
        );
        handle.stop();
        handle.stopped().await;
    }
}
