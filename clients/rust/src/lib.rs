//! Rust client of the mobilis daemon: start `mobilisd` or reach a running one, and call
//! its JSON-RPC methods over WebSocket.
//!
//! ```no_run
//! # async fn example() -> Result<(), mobilis_client::ClientError> {
//! let daemon = mobilis_client::Daemon::spawn(&mobilis_client::DaemonOptions::default())?;
//! let client = mobilis_client::Client::connect(daemon.url(), None).await?;
//! use mobilis_client::protocol::{method, params::NoParams};
//! let info = client.request::<method::ServerInfoMethod>(&NoParams {}).await?;
//! println!("mobilisd {}", info.version);
//! # Ok(()) }
//! ```

use jsonrpsee::core::client::{ClientT, SubscriptionClientT};
use jsonrpsee::core::params::{ArrayParams, ObjectParams};
use jsonrpsee_ws_client::{WsClient, WsClientBuilder};
use mobilis_protocol::Method;
use serde_json::Value;
use std::io::{BufRead, BufReader};
use std::path::PathBuf;
use std::process::{Child, Command, Stdio};
use std::time::Duration;

/// The protocol's types (every method's params and result), re-exported for callers.
pub use mobilis_protocol as protocol;
pub use mobilis_protocol::{ErrorData, ErrorKind, Outcome, ProgressEvent};

/// Why a call failed.
#[derive(Debug, thiserror::Error)]
pub enum ClientError {
    /// The daemon answered with a JSON-RPC error.
    #[error("{message} (error {code}){}", help_suffix(.data))]
    Rpc {
        code: i32,
        message: String,
        data: Option<Value>,
    },
    /// The daemon could not be reached or the connection broke.
    #[error("{0}")]
    Transport(String),
    /// The daemon could not be started.
    #[error("{0}")]
    Daemon(String),
    /// A request or an answer does not have the shape the protocol gives it.
    #[error("{0}")]
    Protocol(String),
}

fn help_suffix(data: &Option<Value>) -> String {
    match data.as_ref().and_then(|d| d.get("help")).and_then(Value::as_str) {
        Some(help) => format!("; {help}"),
        None => String::new(),
    }
}

impl ClientError {
    /// The JSON-RPC error code, if the daemon answered with an error.
    pub fn code(&self) -> Option<i32> {
        match self {
            ClientError::Rpc { code, .. } => Some(*code),
            _ => None,
        }
    }

    /// The error's `data` member, if the daemon answered with an error that has one.
    pub fn data(&self) -> Option<ErrorData> {
        match self {
            ClientError::Rpc { data: Some(data), .. } => serde_json::from_value(data.clone()).ok(),
            _ => None,
        }
    }

    /// The kind of error the daemon answered with.
    pub fn kind(&self) -> Option<ErrorKind> {
        self.code().and_then(ErrorKind::from_code)
    }
}

/// `params` as the JSON object a call sends, with `deadline_s` where the method takes one.
fn request_object<M: Method>(params: &M::Params, deadline_s: Option<f64>) -> Result<Value, ClientError> {
    let mut value = serde_json::to_value(params).map_err(|e| ClientError::Protocol(format!("{}: {e}", M::NAME)))?;
    if let Some(seconds) = deadline_s {
        let takes_one = mobilis_protocol::method(M::NAME).is_some_and(|spec| spec.deadline.is_some());
        match value.as_object_mut() {
            Some(map) if takes_one => {
                map.insert("deadline_s".into(), Value::from(seconds));
            }
            _ => return Err(ClientError::Protocol(format!("{} takes no deadline_s", M::NAME))),
        }
    }
    Ok(value)
}

/// An answer read as method `M`'s result type.
fn read_result<M: Method>(answer: Value) -> Result<M::Result, ClientError> {
    serde_json::from_value(answer)
        .map_err(|e| ClientError::Protocol(format!("the answer to {} is not what the protocol says: {e}", M::NAME)))
}

/// A connection to a daemon.
pub struct Client {
    inner: WsClient,
}

/// Turns an `http://` address into the `ws://` one of the same port.
pub fn websocket_url(url: &str) -> String {
    if let Some(rest) = url.strip_prefix("http://") {
        format!("ws://{rest}")
    } else if let Some(rest) = url.strip_prefix("https://") {
        format!("wss://{rest}")
    } else {
        url.to_owned()
    }
}

impl Client {
    /// Connects to `url` (`http://host:port` or `ws://host:port`), with a bearer token if
    /// the daemon requires one.
    pub async fn connect(url: &str, token: Option<&str>) -> Result<Self, ClientError> {
        let mut headers = http::HeaderMap::new();
        if let Some(token) = token {
            let value = http::HeaderValue::from_str(&format!("Bearer {token}"))
                .map_err(|_| ClientError::Transport("the token holds characters a header cannot carry".into()))?;
            headers.insert(http::header::AUTHORIZATION, value);
        }
        let inner = WsClientBuilder::default()
            .set_headers(headers)
            // Analyses of large datasets run for minutes; the daemon answers when done.
            .request_timeout(Duration::from_secs(6 * 3600))
            .max_request_size(64 * 1024 * 1024)
            .max_response_size(256 * 1024 * 1024)
            .build(websocket_url(url))
            .await
            .map_err(|e| ClientError::Transport(format!("cannot connect to {url}: {e}")))?;
        Ok(Client { inner })
    }

    /// Calls a method with by-name parameters (`{}` or `null` for none).
    pub async fn call(&self, method: &str, params: Value) -> Result<Value, ClientError> {
        let result = match params {
            Value::Object(map) => {
                let mut object = ObjectParams::new();
                for (key, value) in map {
                    object
                        .insert(&key, value)
                        .map_err(|e| ClientError::Transport(e.to_string()))?;
                }
                self.inner.request::<Value, _>(method, object).await
            }
            Value::Null => self.inner.request::<Value, _>(method, ArrayParams::new()).await,
            other => {
                return Err(ClientError::Transport(format!(
                    "parameters must be a JSON object, not {other}"
                )));
            }
        };
        result.map_err(|error| match error {
            jsonrpsee::core::client::Error::Call(object) => ClientError::Rpc {
                code: object.code(),
                message: object.message().to_owned(),
                data: object.data().and_then(|raw| serde_json::from_str(raw.get()).ok()),
            },
            other => ClientError::Transport(other.to_string()),
        })
    }

    /// Calls method `M` with its params type and reads the answer as its result type.
    pub async fn request<M: Method>(&self, params: &M::Params) -> Result<M::Result, ClientError> {
        let answer = self.call(M::NAME, request_object::<M>(params, None)?).await?;
        read_result::<M>(answer)
    }

    /// [`Client::request`] with a deadline (`deadline_s`, for the methods that take one) and
    /// the call's progress handed to `on_event` while it runs (see [`Client::call_with_progress`]).
    pub async fn request_with_progress<M: Method>(
        &self,
        params: &M::Params,
        deadline_s: Option<f64>,
        on_event: impl FnMut(&ProgressEvent),
    ) -> Result<M::Result, ClientError> {
        let params = request_object::<M>(params, deadline_s)?;
        let answer = self.call_with_progress(M::NAME, params, on_event).await?;
        read_result::<M>(answer)
    }

    /// Subscribes to the progress of the call that is (or will be) given `call_id`.
    /// Subscribe before starting the call; a call that ended recently yields its end at once.
    pub async fn subscribe_progress(&self, call_id: &str) -> Result<ProgressEvents, ClientError> {
        let mut params = ObjectParams::new();
        params
            .insert("call_id", call_id)
            .map_err(|e| ClientError::Transport(e.to_string()))?;
        let inner = self
            .inner
            .subscribe::<Value, _>(
                mobilis_protocol::method::ProgressSubscribe::NAME,
                params,
                mobilis_protocol::method::ProgressUnsubscribe::NAME,
            )
            .await
            .map_err(|e| ClientError::Transport(format!("cannot subscribe to progress: {e}")))?;
        Ok(ProgressEvents { inner })
    }

    /// Calls `method` (analysis.run or pipeline.run) with a `call_id` (the one in `params`,
    /// else a new one) and hands each progress event to `on_event` while it runs.
    pub async fn call_with_progress(
        &self,
        method: &str,
        mut params: Value,
        mut on_event: impl FnMut(&ProgressEvent),
    ) -> Result<Value, ClientError> {
        let call_id = match params.get("call_id").and_then(Value::as_str) {
            Some(id) => id.to_owned(),
            None => {
                let id = new_call_id();
                if let Some(map) = params.as_object_mut() {
                    map.insert("call_id".into(), Value::String(id.clone()));
                }
                id
            }
        };
        let mut events = self.subscribe_progress(&call_id).await?;
        let call = self.call(method, params);
        tokio::pin!(call);
        let mut events_open = true;
        loop {
            tokio::select! {
                result = &mut call => {
                    // Hand over what arrived before the answer, ending with the end event.
                    while events_open {
                        match tokio::time::timeout(Duration::from_millis(500), events.next()).await {
                            Ok(Some(event)) => {
                                events_open = !matches!(event, ProgressEvent::End { .. });
                                on_event(&event);
                            }
                            _ => events_open = false,
                        }
                    }
                    return result;
                }
                event = events.next(), if events_open => match event {
                    Some(event) => {
                        events_open = !matches!(event, ProgressEvent::End { .. });
                        on_event(&event);
                    }
                    None => events_open = false,
                },
            }
        }
    }
}

/// A call id unique to this process and moment, for calls whose caller gave none.
pub fn new_call_id() -> String {
    use std::sync::atomic::{AtomicU64, Ordering};
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_nanos())
        .unwrap_or(0);
    format!(
        "rust-{}-{nanos}-{}",
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    )
}

/// The progress events of one call, ending after its end event.
pub struct ProgressEvents {
    inner: jsonrpsee::core::client::Subscription<Value>,
}

impl ProgressEvents {
    /// The next event; `None` once the subscription is over.
    pub async fn next(&mut self) -> Option<ProgressEvent> {
        loop {
            let event = self.inner.next().await?.ok()?;
            // An event of a shape this client does not know is skipped.
            if let Ok(event) = serde_json::from_value::<ProgressEvent>(event) {
                return Some(event);
            }
        }
    }
}

/// How to start a daemon.
#[derive(Debug, Clone, Default)]
pub struct DaemonOptions {
    /// The `mobilisd` binary; default: [`locate_daemon`].
    pub binary: Option<PathBuf>,
    /// `--workspace`; default: the daemon's own default.
    pub workspace: Option<PathBuf>,
    /// `--plugin-dir`, repeatable; default: the plugins next to the binary.
    pub plugin_dirs: Vec<PathBuf>,
    /// `--data-root`, repeatable.
    pub data_roots: Vec<PathBuf>,
    /// The daemon's working directory (its first data root).
    pub working_directory: Option<PathBuf>,
    /// Pass the daemon's log to this process's stderr instead of discarding it.
    pub show_log: bool,
    /// Further `mobilisd` arguments (for example `--allow-origin`, `--token`).
    pub extra_arguments: Vec<String>,
}

/// A daemon this process started; stopped when dropped.
pub struct Daemon {
    child: Child,
    url: String,
}

/// Finds `mobilisd`: `$MOBILISD`, then next to the running executable, then one directory
/// up (test binaries live in `target/<profile>/deps`).
pub fn locate_daemon() -> Option<PathBuf> {
    if let Some(path) = std::env::var_os("MOBILISD") {
        return Some(PathBuf::from(path));
    }
    let exe = std::env::current_exe().ok()?;
    let name = format!("mobilisd{}", std::env::consts::EXE_SUFFIX);
    let dir = exe.parent()?;
    [dir.join(&name), dir.parent()?.join(&name)]
        .into_iter()
        .find(|p| p.is_file())
}

impl Daemon {
    /// Starts `mobilisd --listen 127.0.0.1:0` and waits for its ready line.
    pub fn spawn(options: &DaemonOptions) -> Result<Daemon, ClientError> {
        let binary = options.binary.clone().or_else(locate_daemon).ok_or_else(|| {
            ClientError::Daemon(
                "cannot find mobilisd next to this program; build it with `cargo build` or set MOBILISD".into(),
            )
        })?;
        let mut command = Command::new(&binary);
        command.args(["--listen", "127.0.0.1:0"]);
        if let Some(workspace) = &options.workspace {
            command.arg("--workspace").arg(workspace);
        }
        for dir in &options.plugin_dirs {
            command.arg("--plugin-dir").arg(dir);
        }
        for root in &options.data_roots {
            command.arg("--data-root").arg(root);
        }
        command.args(&options.extra_arguments);
        if let Some(dir) = &options.working_directory {
            command.current_dir(dir);
        }
        command.stdin(Stdio::null()).stdout(Stdio::piped());
        command.stderr(if options.show_log {
            Stdio::inherit()
        } else {
            Stdio::null()
        });
        let mut child = command
            .spawn()
            .map_err(|e| ClientError::Daemon(format!("cannot start {}: {e}", binary.display())))?;
        let stdout = child.stdout.take().expect("stdout is piped");
        let mut line = String::new();
        BufReader::new(stdout)
            .read_line(&mut line)
            .map_err(|e| ClientError::Daemon(format!("cannot read mobilisd's output: {e}")))?;
        let Some(url) = line.trim().strip_prefix("listening on ").map(str::to_owned) else {
            let _ = child.kill();
            let status = child.wait().ok();
            return Err(ClientError::Daemon(format!(
                "mobilisd did not start (exit status {status:?}); run it by hand to see its log"
            )));
        };
        Ok(Daemon { child, url })
    }

    /// The daemon's address, `http://127.0.0.1:PORT`.
    pub fn url(&self) -> &str {
        &self.url
    }

    /// The daemon's process id.
    pub fn pid(&self) -> u32 {
        self.child.id()
    }

    /// Stops the daemon and waits for it to exit.
    pub fn stop(mut self) {
        self.terminate();
    }

    fn terminate(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

impl Drop for Daemon {
    fn drop(&mut self) {
        self.terminate();
    }
}
