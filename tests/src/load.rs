//! A load generator for a running `mobilisd`: many async clients, each on its own connection
//! (HTTP/1.1 keep-alive or WebSocket), sending a fixed mix of cheap reads and small analyses
//! one after another and timing every answer.
//!
//! It is built to be cheap itself, so that the daemon and not the generator is what a run
//! measures: one tokio task per client, requests written as ready JSON text, no retries, no
//! client-side queueing. Each request has a deadline ([`ANSWER_DEADLINE`]) so that a run
//! always ends; a request past it counts as failed.
//!
//! The mix, per 20 requests of a client (clients start at different places in it, so that
//! the analyses do not all arrive together): 6 `server.info`, 3 `dataset.list` (a page of
//! 50), 3 `dataset.info`, 3 `analysis.describe`, one `analysis.run` of `hall.reduce` whose
//! output is kept, and twice an `analysis.run` whose output is dropped at once
//! (`dataset.drop`). The analyses reduce a small table of readings (2 samples at 3
//! temperatures) that [`prepare`] imports first.
//!
//! After the run every kept output must be listed and every dropped one gone. The capacity
//! benchmark (`tests/benches/capacity.rs`) runs it against a release daemon; its goal is
//! `server.info` p99 at most 20 ms under 32 clients, and it says whether that was met (no test
//! asserts on time). The reliability check `load` runs the same mix against the debug daemon,
//! 8 clients x 100 requests per transport by default (32 x 1,000 under
//! `MOBILIS_SLOW_TESTS=1`), and fails on any failed request or lost output.

use mobilis_client::{Client, ClientError};
use serde_json::{json, Value};
use std::collections::BTreeMap;
use std::time::{Duration, Instant};

/// How long one request may take before it counts as failed: far above any answer of the mix
/// on a loaded 2-core machine, and short enough that a stuck daemon ends the run.
pub const ANSWER_DEADLINE: Duration = Duration::from_secs(60);

/// The dataset of readings the analyses of the mix reduce.
pub const READINGS_DATASET: &str = "load-readings";

/// How the clients reach the daemon.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Transport {
    /// HTTP/1.1 POSTs on one kept-alive connection per client (RFC 9112, section 9.3).
    HttpKeepAlive,
    /// One WebSocket per client (RFC 6455).
    WebSocket,
}

impl Transport {
    pub fn name(self) -> &'static str {
        match self {
            Transport::HttpKeepAlive => "http",
            Transport::WebSocket => "websocket",
        }
    }

    /// `http` or `websocket` (also `ws`); anything else is none.
    pub fn parse(text: &str) -> Option<Transport> {
        match text.trim().to_ascii_lowercase().as_str() {
            "http" => Some(Transport::HttpKeepAlive),
            "websocket" | "ws" => Some(Transport::WebSocket),
            _ => None,
        }
    }
}

/// One run of the generator.
#[derive(Clone, Debug)]
pub struct LoadPlan {
    /// The daemon's address, `http://127.0.0.1:PORT`.
    pub url: String,
    pub token: Option<String>,
    pub transport: Transport,
    pub clients: usize,
    pub requests_per_client: usize,
    /// Prefix of the output datasets' names, so that runs against one daemon do not collide.
    pub tag: String,
}

/// One kind of request in the mix; also the label its latencies are reported under.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Step {
    ServerInfo,
    DatasetList,
    DatasetInfo,
    AnalysisDescribe,
    RunKept,
    RunDropped,
    Drop,
}

impl Step {
    pub fn label(self) -> &'static str {
        match self {
            Step::ServerInfo => "server.info",
            Step::DatasetList => "dataset.list",
            Step::DatasetInfo => "dataset.info",
            Step::AnalysisDescribe => "analysis.describe",
            Step::RunKept => "analysis.run (kept)",
            Step::RunDropped => "analysis.run (dropped)",
            Step::Drop => "dataset.drop",
        }
    }
}

/// The mix as a cycle of 20 requests. A dropped run is followed by its drop, so each
/// `RunDropped` entry stands for two requests.
const CYCLE: [Step; 18] = [
    Step::ServerInfo,
    Step::DatasetList,
    Step::RunDropped,
    Step::ServerInfo,
    Step::DatasetInfo,
    Step::AnalysisDescribe,
    Step::ServerInfo,
    Step::RunKept,
    Step::DatasetList,
    Step::DatasetInfo,
    Step::ServerInfo,
    Step::AnalysisDescribe,
    Step::RunDropped,
    Step::ServerInfo,
    Step::DatasetList,
    Step::DatasetInfo,
    Step::ServerInfo,
    Step::AnalysisDescribe,
];

/// What a run measured.
#[derive(Debug, Default)]
pub struct LoadReport {
    pub transport: Option<Transport>,
    pub clients: usize,
    /// Requests sent (each one answered or failed).
    pub requests: usize,
    pub failed: usize,
    pub wall: Duration,
    /// Latencies of the answered requests, by step.
    pub latencies: BTreeMap<Step, Vec<Duration>>,
    /// Failures by step.
    pub failures: BTreeMap<Step, usize>,
    /// The first few failure messages, for the report.
    pub failure_samples: Vec<String>,
    /// Names of the outputs whose `analysis.run` succeeded and that were kept.
    pub kept_outputs: Vec<String>,
    /// Names of the outputs whose `dataset.drop` succeeded.
    pub dropped_outputs: Vec<String>,
}

/// Latency figures of one step.
#[derive(Clone, Copy, Debug)]
pub struct StepFigures {
    pub count: usize,
    pub p50: Duration,
    pub p99: Duration,
    pub max: Duration,
}

impl LoadReport {
    /// Answered requests per second of wall time.
    pub fn throughput(&self) -> f64 {
        (self.requests - self.failed) as f64 / self.wall.as_secs_f64().max(1e-9)
    }

    /// p50, p99 and maximum of a step (nearest-rank percentiles), if any request of it was answered.
    pub fn figures(&self, step: Step) -> Option<StepFigures> {
        let mut times = self.latencies.get(&step)?.clone();
        if times.is_empty() {
            return None;
        }
        times.sort();
        let rank = |q: f64| times[((q * times.len() as f64).ceil() as usize).clamp(1, times.len()) - 1];
        Some(StepFigures {
            count: times.len(),
            p50: rank(0.50),
            p99: rank(0.99),
            max: *times.last().expect("not empty"),
        })
    }

    /// The per-step table, one line per step, for a terminal.
    pub fn table(&self) -> String {
        let mut text = format!(
            "  {:<24} {:>7} {:>7} {:>10} {:>10} {:>10}\n",
            "method", "answered", "failed", "p50", "p99", "max"
        );
        let mut steps: Vec<Step> = self.latencies.keys().chain(self.failures.keys()).copied().collect();
        steps.sort();
        steps.dedup();
        for step in steps {
            let failed = self.failures.get(&step).copied().unwrap_or(0);
            match self.figures(step) {
                Some(f) => {
                    text += &format!(
                        "  {:<24} {:>7} {:>7} {:>10} {:>10} {:>10}\n",
                        step.label(),
                        f.count,
                        failed,
                        milliseconds(f.p50),
                        milliseconds(f.p99),
                        milliseconds(f.max)
                    )
                }
                None => text += &format!("  {:<24} {:>7} {:>7}\n", step.label(), 0, failed),
            }
        }
        text
    }

    fn merge(&mut self, other: ClientOutcome) {
        self.requests += other.requests;
        for (step, times) in other.latencies {
            self.latencies.entry(step).or_default().extend(times);
        }
        for (step, count) in other.failures {
            *self.failures.entry(step).or_default() += count;
            self.failed += count;
        }
        for message in other.failure_samples {
            if self.failure_samples.len() < 5 {
                self.failure_samples.push(message);
            }
        }
        self.kept_outputs.extend(other.kept_outputs);
        self.dropped_outputs.extend(other.dropped_outputs);
    }
}

/// A duration in milliseconds with one decimal.
pub fn milliseconds(duration: Duration) -> String {
    format!("{:.1} ms", duration.as_secs_f64() * 1e3)
}

/// The readings the mix's analyses reduce, as inline columns in SI: 2 samples at 3
/// temperatures from the forward model.
pub fn readings_columns() -> Value {
    let readings = crate::van_der_pauw_run(
        &[("load-n", 250.0, 1.3, -624.15), ("load-p", 4000.0, 0.8, 3120.75)],
        &[77.0, 200.0, 300.0],
        [20e-6, -15e-6, 8e-6, 30e-6, -12e-6, 25e-6],
        0.02,
        20261203,
    );
    crate::readings_json_columns(&readings)
}

/// Imports [`READINGS_DATASET`] (replacing one of that name) and checks that `hall.reduce`
/// runs on it, so that a run fails early and clearly when the hall plugin is missing.
pub async fn prepare(url: &str, token: Option<&str>) -> Result<(), String> {
    let client = Client::connect(url, token).await.map_err(|e| e.to_string())?;
    client
        .call(
            "dataset.import",
            json!({"name": READINGS_DATASET, "columns": readings_columns(), "overwrite": true}),
        )
        .await
        .map_err(|e| format!("cannot import the readings: {e}"))?;
    client
        .call("analysis.describe", json!({"analysis": "hall.reduce"}))
        .await
        .map_err(|e| format!("hall.reduce is not there (is the hall plugin built beside mobilisd?): {e}"))?;
    Ok(())
}

/// Runs the plan: every client on its own connection, all at once, until each has sent its
/// requests. Connection failures count as failed requests of the client concerned.
pub async fn run(plan: &LoadPlan) -> LoadReport {
    let started = Instant::now();
    let mut tasks = Vec::with_capacity(plan.clients);
    for index in 0..plan.clients {
        let plan = plan.clone();
        tasks.push(tokio::spawn(async move { run_client(&plan, index).await }));
    }
    let mut report = LoadReport {
        transport: Some(plan.transport),
        clients: plan.clients,
        ..LoadReport::default()
    };
    for task in tasks {
        match task.await {
            Ok(outcome) => report.merge(outcome),
            Err(error) => {
                report.requests += plan.requests_per_client;
                report.failed += plan.requests_per_client;
                report.failure_samples.push(format!("a client task failed: {error}"));
            }
        }
    }
    report.wall = started.elapsed();
    report
}

/// Checks after a run that every kept output is stored and every dropped one is gone.
/// Returns (kept outputs missing, dropped outputs still there).
pub async fn verify_outputs(
    url: &str,
    token: Option<&str>,
    report: &LoadReport,
    tag: &str,
) -> Result<(usize, usize), String> {
    let client = Client::connect(url, token).await.map_err(|e| e.to_string())?;
    let mut stored = std::collections::BTreeSet::new();
    loop {
        let page = client
            .call(
                "dataset.list",
                json!({"prefix": tag, "offset": stored.len(), "limit": 5000}),
            )
            .await
            .map_err(|e| format!("dataset.list failed: {e}"))?;
        let entries = page["datasets"].as_array().cloned().unwrap_or_default();
        stored.extend(entries.iter().filter_map(|e| e["name"].as_str().map(str::to_owned)));
        if entries.is_empty() || stored.len() as u64 >= page["total"].as_u64().unwrap_or(0) {
            break;
        }
    }
    let missing = report
        .kept_outputs
        .iter()
        .filter(|name| !stored.contains(*name))
        .count();
    let left = report
        .dropped_outputs
        .iter()
        .filter(|name| stored.contains(*name))
        .count();
    Ok((missing, left))
}

#[derive(Default)]
struct ClientOutcome {
    requests: usize,
    latencies: BTreeMap<Step, Vec<Duration>>,
    failures: BTreeMap<Step, usize>,
    failure_samples: Vec<String>,
    kept_outputs: Vec<String>,
    dropped_outputs: Vec<String>,
}

impl ClientOutcome {
    fn record(&mut self, step: Step, started: Instant, answer: &Result<Value, String>) {
        self.requests += 1;
        match answer {
            Ok(_) => self.latencies.entry(step).or_default().push(started.elapsed()),
            Err(message) => {
                *self.failures.entry(step).or_default() += 1;
                if self.failure_samples.len() < 5 {
                    self.failure_samples.push(format!("{}: {message}", step.label()));
                }
            }
        }
    }
}

/// One client's connection, whatever the transport.
enum Connection {
    Http(http_keep_alive::Connection),
    WebSocket(Client),
}

impl Connection {
    async fn open(plan: &LoadPlan) -> Result<Connection, String> {
        match plan.transport {
            Transport::HttpKeepAlive => http_keep_alive::Connection::open(&plan.url, plan.token.as_deref())
                .await
                .map(Connection::Http),
            Transport::WebSocket => Client::connect(&plan.url, plan.token.as_deref())
                .await
                .map(Connection::WebSocket)
                .map_err(|e| e.to_string()),
        }
    }

    async fn call(&mut self, method: &str, params: Value) -> Result<Value, String> {
        let answer = async {
            match self {
                Connection::Http(connection) => connection.call(method, params).await,
                Connection::WebSocket(client) => client.call(method, params).await.map_err(|error| match error {
                    ClientError::Rpc { code, message, .. } => format!("error {code}: {message}"),
                    other => other.to_string(),
                }),
            }
        };
        match tokio::time::timeout(ANSWER_DEADLINE, answer).await {
            Ok(answer) => answer,
            Err(_) => Err(format!("no answer within {} s", ANSWER_DEADLINE.as_secs())),
        }
    }
}

async fn run_client(plan: &LoadPlan, index: usize) -> ClientOutcome {
    let mut outcome = ClientOutcome::default();
    let mut connection = match Connection::open(plan).await {
        Ok(connection) => connection,
        Err(message) => {
            outcome.requests = plan.requests_per_client;
            outcome.failures.insert(Step::ServerInfo, plan.requests_per_client);
            outcome
                .failure_samples
                .push(format!("client {index} could not connect: {message}"));
            return outcome;
        }
    };
    let run_params =
        |output: &str| json!({"analysis": "hall.reduce", "inputs": {"readings": READINGS_DATASET}, "output": output});
    // Clients start at different places in the cycle so that their analyses spread out.
    let mut position = (index * 7) % CYCLE.len();
    let mut analyses = 0usize;
    while outcome.requests < plan.requests_per_client {
        let step = CYCLE[position];
        position = (position + 1) % CYCLE.len();
        let started = Instant::now();
        match step {
            Step::ServerInfo => {
                let answer = connection.call("server.info", json!({})).await;
                outcome.record(step, started, &answer);
            }
            Step::DatasetList => {
                let answer = connection.call("dataset.list", json!({"limit": 50})).await;
                outcome.record(step, started, &answer);
            }
            Step::DatasetInfo => {
                let answer = connection.call("dataset.info", json!({"name": READINGS_DATASET})).await;
                outcome.record(step, started, &answer);
            }
            Step::AnalysisDescribe => {
                let answer = connection
                    .call("analysis.describe", json!({"analysis": "hall.reduce"}))
                    .await;
                outcome.record(step, started, &answer);
            }
            Step::RunKept => {
                let output = format!("{}-c{index}-kept-{analyses}", plan.tag);
                analyses += 1;
                let answer = connection.call("analysis.run", run_params(&output)).await;
                outcome.record(step, started, &answer);
                if answer.is_ok() {
                    outcome.kept_outputs.push(output);
                }
            }
            Step::RunDropped | Step::Drop => {
                let output = format!("{}-c{index}-dropped-{analyses}", plan.tag);
                analyses += 1;
                let answer = connection.call("analysis.run", run_params(&output)).await;
                outcome.record(Step::RunDropped, started, &answer);
                if answer.is_ok() && outcome.requests < plan.requests_per_client {
                    let started = Instant::now();
                    let dropped = connection.call("dataset.drop", json!({"name": output})).await;
                    outcome.record(Step::Drop, started, &dropped);
                    if dropped.is_ok() {
                        outcome.dropped_outputs.push(output);
                    }
                }
            }
        }
    }
    outcome
}

/// JSON-RPC 2.0 over HTTP/1.1 on one kept-alive connection, with hyper's low-level client
/// (no pool, no redirects, no TLS: the generator should cost as little as possible).
pub mod http_keep_alive {
    use http_body_util::{BodyExt, Full};
    use hyper::body::Bytes;
    use hyper::client::conn::http1::SendRequest;
    use hyper_util::rt::TokioIo;
    use serde_json::{json, Value};

    pub struct Connection {
        sender: SendRequest<Full<Bytes>>,
        authority: String,
        authorization: Option<String>,
        next_id: u64,
    }

    impl Connection {
        pub async fn open(url: &str, token: Option<&str>) -> Result<Connection, String> {
            let authority = url
                .strip_prefix("http://")
                .ok_or_else(|| format!("{url} is not an http:// address"))?
                .trim_end_matches('/')
                .to_owned();
            let stream = tokio::net::TcpStream::connect(&authority)
                .await
                .map_err(|e| format!("cannot connect to {authority}: {e}"))?;
            // Small request-answer exchanges: waiting to fill a segment only adds latency.
            let _ = stream.set_nodelay(true);
            let (sender, driver) = hyper::client::conn::http1::handshake(TokioIo::new(stream))
                .await
                .map_err(|e| format!("HTTP handshake with {authority} failed: {e}"))?;
            tokio::spawn(driver);
            Ok(Connection {
                sender,
                authority,
                authorization: token.map(|t| format!("Bearer {t}")),
                next_id: 1,
            })
        }

        /// One request, one answer; the result, or the error's code and message as text.
        pub async fn call(&mut self, method: &str, params: Value) -> Result<Value, String> {
            let id = self.next_id;
            self.next_id += 1;
            let body = json!({"jsonrpc": "2.0", "id": id, "method": method, "params": params}).to_string();
            let mut request = http::Request::post("/")
                .header(http::header::HOST, &self.authority)
                .header(http::header::CONTENT_TYPE, "application/json");
            if let Some(authorization) = &self.authorization {
                request = request.header(http::header::AUTHORIZATION, authorization);
            }
            let request = request
                .body(Full::new(Bytes::from(body)))
                .map_err(|e| format!("cannot build the request: {e}"))?;
            self.sender
                .ready()
                .await
                .map_err(|e| format!("the connection closed: {e}"))?;
            let response = self
                .sender
                .send_request(request)
                .await
                .map_err(|e| format!("the request failed: {e}"))?;
            let status = response.status();
            let bytes = response
                .into_body()
                .collect()
                .await
                .map_err(|e| format!("the answer broke off: {e}"))?
                .to_bytes();
            let answer: Value = serde_json::from_slice(&bytes).map_err(|_| {
                format!(
                    "HTTP {status} with a body that is not JSON: {}",
                    String::from_utf8_lossy(&bytes[..bytes.len().min(200)])
                )
            })?;
            if answer["id"] != json!(id) {
                return Err(format!("the answer carries id {} instead of {id}", answer["id"]));
            }
            if let Some(error) = answer.get("error") {
                return Err(format!("error {}: {}", error["code"], error["message"]));
            }
            answer
                .get("result")
                .cloned()
                .ok_or_else(|| format!("HTTP {status}: an answer with neither result nor error: {answer}"))
        }
    }
}

/// CPU time and memory of a process, from `/proc` (Linux).
#[derive(Clone, Copy, Debug)]
pub struct ProcessUsage {
    /// User plus system CPU time so far.
    pub cpu: Duration,
    /// Resident set size now, KiB.
    pub rss_kib: u64,
    /// Peak resident set size, KiB.
    pub peak_rss_kib: u64,
}

impl ProcessUsage {
    /// The usage of process `pid` now (`/proc/PID/stat` fields 14 and 15, utime and stime in
    /// clock ticks, per proc(5); `VmRSS` and `VmHWM` of `/proc/PID/status`).
    pub fn of(pid: u32) -> Option<ProcessUsage> {
        let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
        // The command name (field 2) is in parentheses and may hold spaces: count after it.
        let after_name = &stat[stat.rfind(')')? + 1..];
        let fields: Vec<&str> = after_name.split_whitespace().collect();
        // fields[0] is field 3 (state), so field 14 is fields[11].
        let ticks: u64 = fields.get(11)?.parse::<u64>().ok()? + fields.get(12)?.parse::<u64>().ok()?;
        let status = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
        let kib = |key: &str| -> Option<u64> {
            status
                .lines()
                .find(|line| line.starts_with(key))?
                .split_whitespace()
                .nth(1)?
                .parse()
                .ok()
        };
        Some(ProcessUsage {
            cpu: Duration::from_secs_f64(ticks as f64 / clock_ticks_per_second()),
            rss_kib: kib("VmRSS:")?,
            peak_rss_kib: kib("VmHWM:")?,
        })
    }

    /// CPU used between `earlier` and `self`, in cores over `wall` (1.0 = one core busy).
    pub fn cores_since(&self, earlier: &ProcessUsage, wall: Duration) -> f64 {
        self.cpu.saturating_sub(earlier.cpu).as_secs_f64() / wall.as_secs_f64().max(1e-9)
    }
}

/// `getconf CLK_TCK` (POSIX `sysconf(_SC_CLK_TCK)`), or 100, the value on Linux builds.
fn clock_ticks_per_second() -> f64 {
    static TICKS: std::sync::OnceLock<f64> = std::sync::OnceLock::new();
    *TICKS.get_or_init(|| {
        std::process::Command::new("getconf")
            .arg("CLK_TCK")
            .output()
            .ok()
            .and_then(|output| String::from_utf8(output.stdout).ok())
            .and_then(|text| text.trim().parse::<f64>().ok())
            .filter(|ticks| *ticks > 0.0)
            .unwrap_or(100.0)
    })
}

/// The leanest clients there are, for timing the daemon's share of a round trip: blocking
/// sockets on the caller's thread (no runtime, no task to wake), requests written as ready
/// bytes, and answers returned as bytes without being parsed. HTTP/1.1 on one kept-alive
/// connection (RFC 9112) and a WebSocket (RFC 6455) with one text frame per message.
pub mod raw_wire {
    use std::io::{Read, Write};
    use std::net::TcpStream;

    /// The authority (`host:port`) of an `http://` address.
    fn authority(url: &str) -> Result<&str, String> {
        url.strip_prefix("http://")
            .map(|rest| rest.trim_end_matches('/'))
            .ok_or_else(|| format!("{url} is not an http:// address"))
    }

    fn connect(authority: &str) -> Result<TcpStream, String> {
        let stream = TcpStream::connect(authority).map_err(|e| format!("cannot connect to {authority}: {e}"))?;
        // Small request-answer exchanges: waiting to fill a segment only adds latency.
        stream
            .set_nodelay(true)
            .map_err(|e| format!("cannot set TCP_NODELAY: {e}"))?;
        Ok(stream)
    }

    /// Reads until the end of an HTTP head (`\r\n\r\n`); returns the head's length, the
    /// bytes after it staying in `buffer`.
    fn read_head(stream: &mut TcpStream, buffer: &mut Vec<u8>) -> Result<usize, String> {
        let mut scanned = 0;
        loop {
            if let Some(at) = buffer[scanned..].windows(4).position(|w| w == b"\r\n\r\n") {
                return Ok(scanned + at + 4);
            }
            scanned = buffer.len().saturating_sub(3);
            let mut chunk = [0u8; 16 * 1024];
            let read = stream.read(&mut chunk).map_err(|e| format!("reading an answer: {e}"))?;
            if read == 0 {
                return Err("the daemon closed the connection".into());
            }
            buffer.extend_from_slice(&chunk[..read]);
        }
    }

    /// JSON-RPC over HTTP/1.1 keep-alive: one POST, one answer body.
    pub struct Http {
        stream: TcpStream,
        head: Vec<u8>,
        buffer: Vec<u8>,
    }

    impl Http {
        pub fn open(url: &str) -> Result<Http, String> {
            let authority = authority(url)?;
            Ok(Http {
                stream: connect(authority)?,
                head: format!("POST / HTTP/1.1\r\nHost: {authority}\r\nContent-Type: application/json\r\n")
                    .into_bytes(),
                buffer: Vec::new(),
            })
        }

        /// Posts `body` and returns the answer's body, unread.
        pub fn call(&mut self, body: &[u8]) -> Result<&[u8], String> {
            let mut request = Vec::with_capacity(self.head.len() + 32 + body.len());
            request.extend_from_slice(&self.head);
            request.extend_from_slice(format!("Content-Length: {}\r\n\r\n", body.len()).as_bytes());
            request.extend_from_slice(body);
            self.stream
                .write_all(&request)
                .map_err(|e| format!("sending a request: {e}"))?;
            self.buffer.clear();
            let head_length = read_head(&mut self.stream, &mut self.buffer)?;
            let head =
                std::str::from_utf8(&self.buffer[..head_length]).map_err(|_| "an answer head that is not text")?;
            if !head.starts_with("HTTP/1.1 200") {
                return Err(format!(
                    "the answer is not 200 OK: {}",
                    head.lines().next().unwrap_or("")
                ));
            }
            let length: usize = head
                .lines()
                .find_map(|line| {
                    let (name, value) = line.split_once(':')?;
                    name.eq_ignore_ascii_case("content-length")
                        .then(|| value.trim().parse().ok())?
                })
                .ok_or("an answer without Content-Length")?;
            let end = head_length + length;
            while self.buffer.len() < end {
                let have = self.buffer.len();
                self.buffer.resize(end.max(have + 64 * 1024), 0);
                let read = self
                    .stream
                    .read(&mut self.buffer[have..])
                    .map_err(|e| format!("reading an answer: {e}"))?;
                self.buffer.truncate(have + read);
                if read == 0 {
                    return Err("the daemon closed the connection mid-answer".into());
                }
            }
            Ok(&self.buffer[head_length..end])
        }
    }

    /// JSON-RPC over a WebSocket: one text message out, one message back.
    pub struct WebSocket {
        stream: TcpStream,
        buffer: Vec<u8>,
        message: Vec<u8>,
    }

    impl WebSocket {
        pub fn open(url: &str) -> Result<WebSocket, String> {
            let authority = authority(url)?;
            let mut stream = connect(authority)?;
            // The handshake of RFC 6455, section 4.1, with the key of its own example.
            let handshake = format!(
                "GET / HTTP/1.1\r\nHost: {authority}\r\nUpgrade: websocket\r\nConnection: Upgrade\r\n\
                 Sec-WebSocket-Key: dGhlIHNhbXBsZSBub25jZQ==\r\nSec-WebSocket-Version: 13\r\n\r\n"
            );
            stream
                .write_all(handshake.as_bytes())
                .map_err(|e| format!("sending the handshake: {e}"))?;
            let mut buffer = Vec::new();
            let head_length = read_head(&mut stream, &mut buffer)?;
            if !buffer.starts_with(b"HTTP/1.1 101") {
                return Err(format!(
                    "the WebSocket handshake was refused: {}",
                    String::from_utf8_lossy(&buffer[..head_length])
                        .lines()
                        .next()
                        .unwrap_or("")
                ));
            }
            buffer.drain(..head_length);
            Ok(WebSocket {
                stream,
                buffer,
                message: Vec::new(),
            })
        }

        fn fill(&mut self, wanted: usize) -> Result<(), String> {
            while self.buffer.len() < wanted {
                let have = self.buffer.len();
                self.buffer.resize(wanted.max(have + 64 * 1024), 0);
                let read = self
                    .stream
                    .read(&mut self.buffer[have..])
                    .map_err(|e| format!("reading a frame: {e}"))?;
                self.buffer.truncate(have + read);
                if read == 0 {
                    return Err("the daemon closed the WebSocket".into());
                }
            }
            Ok(())
        }

        /// Sends `text` as one message and returns the next message's payload, unread.
        pub fn call(&mut self, text: &[u8]) -> Result<&[u8], String> {
            // A client's frames are masked (section 5.3); a zero key leaves the payload as
            // it is, which keeps the client's own work to a copy.
            let mut frame = Vec::with_capacity(text.len() + 14);
            frame.push(0x81);
            match text.len() {
                n if n < 126 => frame.push(0x80 | n as u8),
                n if n <= 0xffff => {
                    frame.push(0x80 | 126);
                    frame.extend_from_slice(&(n as u16).to_be_bytes());
                }
                n => {
                    frame.push(0x80 | 127);
                    frame.extend_from_slice(&(n as u64).to_be_bytes());
                }
            }
            frame.extend_from_slice(&[0; 4]);
            frame.extend_from_slice(text);
            self.stream
                .write_all(&frame)
                .map_err(|e| format!("sending a frame: {e}"))?;
            // Frames of the answer (section 5.2) until one ends the message.
            self.message.clear();
            loop {
                self.fill(2)?;
                let (first, second) = (self.buffer[0], self.buffer[1]);
                let (mut header, length) = match second & 0x7f {
                    126 => {
                        self.fill(4)?;
                        (4, u16::from_be_bytes([self.buffer[2], self.buffer[3]]) as usize)
                    }
                    127 => {
                        self.fill(10)?;
                        let bytes: [u8; 8] = self.buffer[2..10].try_into().expect("eight bytes");
                        (10, u64::from_be_bytes(bytes) as usize)
                    }
                    n => (2, n as usize),
                };
                if second & 0x80 != 0 {
                    return Err("the daemon masked a frame (RFC 6455 forbids it)".into());
                }
                self.fill(header + length)?;
                let opcode = first & 0x0f;
                if opcode < 0x8 {
                    self.message.extend_from_slice(&self.buffer[header..header + length]);
                } else if opcode == 0x8 {
                    return Err("the daemon closed the WebSocket".into());
                }
                header += length;
                self.buffer.drain(..header);
                if first & 0x80 != 0 && opcode < 0x8 {
                    return Ok(&self.message);
                }
            }
        }
    }
}
