//! Supervised worker processes for plugins that are not trusted.
//!
//! An isolated plugin library is never mapped into the daemon. The daemon starts itself
//! again as `mobilisd --plugin-worker LIB`; that worker loads the library with the same
//! loader and calls it through the same C ABI, and the tables cross the worker's stdin and
//! stdout as Arrow IPC ([`crate::worker_protocol`]). Whatever the plugin does to its process
//! (a NULL dereference, `exit`, `abort`, an endless loop) ends one call with a plugin failure
//! (5001) that names what happened; the next call gets a fresh worker.
//!
//! Each library has a pool of up to one worker per CPU, started on demand and kept while they
//! are healthy. A call whose client cancels it, or that runs past the per-call deadline, is
//! first asked to stop (the plugin's cancel check turns true); a worker that has not
//! answered after [`STOP_GRACE`] is killed (SIGKILL).
//!
//! # Two places a plugin runs
//!
//! Labs write plugins in C and Rust, and a plugin that dereferences NULL, calls `exit` or
//! aborts would take the daemon down with every client's work. So each library runs in one of
//! two places, shown per plugin as `isolation` in `plugin.list` and `server.info`:
//!
//! - **in process** (`"in_process"`): the mobilis plugins built next to `mobilisd` (the default
//!   when no plugin directory is given) and every library of a `--trusted-plugin-dir DIR`.
//!   Fastest; a crash of the plugin is a crash of the daemon, and there is no deadline: nothing
//!   can stop their code safely. A trusted library is first loaded once in a short-lived
//!   worker: one whose constructor aborts or crashes is refused (`refused by a trial load:
//!   loading the library ended its worker process: killed by SIGABRT ...`), not loaded.
//! - **isolated** (`"isolated"`): every library of a `--plugin-dir DIR`, the default for
//!   plugins from elsewhere, served by this module's workers. Progress and cancellation cross
//!   too.
//!
//! What a fault looks like to a client of an isolated plugin: that call fails with 5001 and
//! words saying what happened (`cfixture.sum: the plugin's worker process killed by SIGSEGV
//! (segmentation fault) during the call; the daemon serves on and a new worker takes the next
//! call`, or `... exited with code 3 ...`). The deadline of a call is `--plugin-call-timeout
//! SECS` (default 600 s); past it, or when the client cancels (`analysis.cancel`), the cancel
//! check turns true, and a worker that has not answered [`STOP_GRACE`] (2 s) later is killed.
//! The call then fails with 5001 (`did not finish within N s ...`) or with the cancelled error.
//! Other calls, other plugins and the stored datasets are untouched. A loader refusal gives the
//! loader's own reason (`dlerror`), never only "dlopen failed".
//!
//! The checks: `cargo test -p mobilis-tests --test suite -- reliability::plugin_isolation` (C plugins
//! from `tests/c-plugin/cfixture.c` built with `FIXTURE_FAULT=1|2|3` segfault, exit(3) or hang
//! on a 13-row table, the hang both past its deadline and cancelled by its client;
//! `FIXTURE_ABORT_ON_LOAD` aborts in its constructor; truncated copies of the hall plugin at
//! several cut points, [`crate::library_check`]). Every plugin ABI test runs in both modes.
//! What isolation costs is printed by `cargo bench -p mobilis-tests --bench hall_reduce`, lines
//! (a-iso) and (b-iso): a worker call adds the Arrow IPC copy of the inputs and the output
//! through a pipe, small beside a reduction (last measured in a debug build on a loaded 2-core
//! machine: `hall.reduce` of a million readings 9.6 s isolated against 10.2 s in process, the
//! same within the noise; the bare boundary, `fixture.identity` of the same nine-column table,
//! 3.6 s against 1.9 s).

use crate::plugin_call::{CallControl, InvokeFailure, InvokeSuccess, PluginIdentity};
use crate::worker_protocol::{self as protocol, Frame, FromWorker, ToWorker};
use mobilis_sdk::abi::{self, PluginDeclaration};
use polars::prelude::DataFrame;
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdin, Command, ExitStatus, Stdio};
use std::sync::atomic::Ordering;
use std::sync::mpsc::{self, Receiver, RecvTimeoutError};
use std::sync::{Arc, Condvar, Mutex};
use std::time::{Duration, Instant};

/// How long a worker that was asked to stop may take before it is killed.
pub const STOP_GRACE: Duration = Duration::from_secs(2);
/// How long a new worker may take to load its library and declare it.
const START_DEADLINE: Duration = Duration::from_secs(60);
/// How often a waiting call looks at its cancel flag and deadline.
const POLL: Duration = Duration::from_millis(20);

/// How isolated plugins run.
#[derive(Debug, Clone)]
pub struct WorkerSettings {
    /// The daemon's own binary, started with `--plugin-worker LIB`.
    pub program: PathBuf,
    /// The deadline of one call into an isolated plugin.
    pub call_timeout: Duration,
    /// Workers per library at most.
    pub capacity: usize,
}

impl WorkerSettings {
    /// Settings with one worker per CPU at most.
    pub fn new(program: PathBuf, call_timeout: Duration) -> Self {
        let capacity = std::thread::available_parallelism().map(|n| n.get()).unwrap_or(1);
        WorkerSettings {
            program,
            call_timeout,
            capacity,
        }
    }
}

/// What the thread reading a worker's stdout passes on.
enum Event {
    Frame(Frame),
    /// The stream ended or broke: the worker has gone (or is going).
    Ended,
}

/// One running worker process.
struct Worker {
    child: Child,
    input: ChildStdin,
    events: Receiver<Event>,
}

impl Worker {
    /// Starts a worker for `library` and waits for its declaration.
    fn start(settings: &WorkerSettings, library: &Path) -> Result<(Worker, PluginIdentity, String), String> {
        let mut child = Command::new(&settings.program)
            .arg("--plugin-worker")
            .arg(library)
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::inherit())
            .spawn()
            .map_err(|error| {
                format!(
                    "cannot start a worker process ({}): {error}",
                    settings.program.display()
                )
            })?;
        let input = child.stdin.take().expect("stdin is piped");
        let mut output = child.stdout.take().expect("stdout is piped");
        let (sender, events) = mpsc::channel();
        std::thread::Builder::new()
            .name("plugin-worker-reader".into())
            .spawn(move || loop {
                match protocol::read_frame(&mut output) {
                    Ok(Some(frame)) => {
                        if sender.send(Event::Frame(frame)).is_err() {
                            return;
                        }
                    }
                    Ok(None) | Err(_) => {
                        let _ = sender.send(Event::Ended);
                        return;
                    }
                }
            })
            .map_err(|error| format!("cannot start a thread for a worker: {error}"))?;
        let mut worker = Worker { child, input, events };
        let started = Instant::now();
        loop {
            match worker.events.recv_timeout(POLL) {
                Ok(Event::Frame(Frame::Json(bytes))) => {
                    return match protocol::decode_message::<FromWorker>(&bytes) {
                        Ok(FromWorker::Ready {
                            name,
                            version,
                            abi_minor,
                            declaration,
                        }) => Ok((
                            worker,
                            PluginIdentity {
                                name,
                                version,
                                abi_minor,
                            },
                            declaration,
                        )),
                        Ok(FromWorker::Refused { reason }) => {
                            worker.stop();
                            Err(reason)
                        }
                        Ok(other) => {
                            worker.stop();
                            Err(format!("the worker answered {other:?} before declaring the plugin"))
                        }
                        Err(error) => {
                            worker.stop();
                            Err(format!("the worker's first message is {error}"))
                        }
                    };
                }
                Ok(Event::Frame(Frame::Table(_))) => {
                    worker.stop();
                    return Err("the worker sent a table before declaring the plugin".into());
                }
                Ok(Event::Ended) | Err(RecvTimeoutError::Disconnected) => {
                    let how = worker.reap();
                    return Err(format!(
                        "loading the library ended its worker process: {how}; the library's initialisation crashes or exits"
                    ));
                }
                Err(RecvTimeoutError::Timeout) if started.elapsed() > START_DEADLINE => {
                    worker.stop();
                    return Err(format!(
                        "loading the library took more than {} s; its initialisation hangs",
                        START_DEADLINE.as_secs()
                    ));
                }
                Err(RecvTimeoutError::Timeout) => {}
            }
        }
    }

    /// Kills the worker and collects it.
    fn stop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }

    /// Collects a worker whose output ended, waiting briefly for it to exit, and says how it
    /// ended. One that lingers with a closed output is killed.
    fn reap(&mut self) -> String {
        let deadline = Instant::now() + STOP_GRACE;
        loop {
            match self.child.try_wait() {
                Ok(Some(status)) => return describe_exit(status),
                Ok(None) if Instant::now() < deadline => std::thread::sleep(POLL),
                _ => {
                    self.stop();
                    return "it closed its output and was killed".into();
                }
            }
        }
    }
}

/// Words for how a process ended: `killed by SIGSEGV (segmentation fault)`, `exited with code 3`.
pub fn describe_exit(status: ExitStatus) -> String {
    #[cfg(unix)]
    {
        use std::os::unix::process::ExitStatusExt;
        if let Some(signal) = status.signal() {
            // Numbers of POSIX signals as Linux and the BSDs number them (signal.h).
            let name = match signal {
                4 => "SIGILL (illegal instruction)",
                6 => "SIGABRT (abort)",
                7 if cfg!(target_os = "linux") => "SIGBUS (bus error)",
                8 => "SIGFPE (arithmetic exception)",
                9 => "SIGKILL",
                10 if !cfg!(target_os = "linux") => "SIGBUS (bus error)",
                11 => "SIGSEGV (segmentation fault)",
                13 => "SIGPIPE",
                15 => "SIGTERM",
                _ => "",
            };
            return if name.is_empty() {
                format!("killed by signal {signal}")
            } else {
                format!("killed by {name}")
            };
        }
    }
    match status.code() {
        Some(code) => format!("exited with code {code}"),
        None => format!("ended ({status})"),
    }
}

/// Loads `library` in a short-lived worker and lets it go: a library whose initialisers
/// crash or exit is refused without harm to the daemon.
pub fn probe(settings: &WorkerSettings, library: &Path) -> Result<(), String> {
    let (mut worker, _, _) =
        Worker::start(settings, library).map_err(|reason| format!("refused by a trial load: {reason}"))?;
    worker.stop();
    Ok(())
}

struct PoolState {
    idle: Vec<Worker>,
    /// Workers running or idle.
    live: usize,
}

/// The workers of one isolated library.
pub struct WorkerPool {
    settings: WorkerSettings,
    library: PathBuf,
    state: Mutex<PoolState>,
    freed: Condvar,
}

/// How a call ended when it did not end with the plugin's own answer.
#[derive(Clone, Copy)]
enum Stopped {
    Cancelled,
    Deadline,
}

impl WorkerPool {
    /// Starts the first worker of `library` (the trial load) and keeps it for the first call.
    pub fn start(
        settings: WorkerSettings,
        library: &Path,
    ) -> Result<(WorkerPool, PluginIdentity, PluginDeclaration), String> {
        let (worker, identity, declaration) = Worker::start(&settings, library)?;
        let declaration: PluginDeclaration = serde_json::from_str(&declaration)
            .map_err(|error| format!("describe returned an unusable declaration: {error}"))?;
        let pool = WorkerPool {
            settings,
            library: library.to_owned(),
            state: Mutex::new(PoolState {
                idle: vec![worker],
                live: 1,
            }),
            freed: Condvar::new(),
        };
        Ok((pool, identity, declaration))
    }

    fn state(&self) -> std::sync::MutexGuard<'_, PoolState> {
        // The state is a list and a count, consistent at every unlock: a panic elsewhere
        // while holding the lock leaves nothing half-done, so its poison is ignored.
        self.state.lock().unwrap_or_else(|poisoned| poisoned.into_inner())
    }

    /// An idle worker, a new one if the pool has room, or the next one freed.
    fn acquire(&self, control: &CallControl) -> Result<Worker, InvokeFailure> {
        let mut state = self.state();
        loop {
            if let Some(worker) = state.idle.pop() {
                return Ok(worker);
            }
            if state.live < self.settings.capacity {
                state.live += 1;
                drop(state);
                return match Worker::start(&self.settings, &self.library) {
                    Ok((worker, _, _)) => Ok(worker),
                    Err(reason) => {
                        self.retire();
                        Err(InvokeFailure {
                            status: abi::STATUS_PANIC,
                            message: format!("cannot start a worker for the plugin: {reason}"),
                        })
                    }
                };
            }
            if control.cancelled.load(Ordering::Relaxed) {
                return Err(InvokeFailure {
                    status: abi::STATUS_CANCELLED,
                    message: "cancelled while waiting for a free plugin worker".into(),
                });
            }
            state = self
                .freed
                .wait_timeout(state, POLL * 5)
                .unwrap_or_else(|poisoned| poisoned.into_inner())
                .0;
        }
    }

    fn release(&self, worker: Worker) {
        self.state().idle.push(worker);
        self.freed.notify_one();
    }

    /// Counts a worker that has gone; the next call starts a new one.
    fn retire(&self) {
        let mut state = self.state();
        state.live = state.live.saturating_sub(1);
        drop(state);
        self.freed.notify_one();
    }

    /// Calls an analysis in a worker. Blocking.
    pub fn invoke(
        &self,
        analysis: &str,
        params: &serde_json::Value,
        inputs: &[(String, DataFrame)],
        control: &Arc<CallControl>,
    ) -> Result<InvokeSuccess, InvokeFailure> {
        let mut worker = self.acquire(control)?;
        let started = Instant::now();
        match self.converse(&mut worker, analysis, params, inputs, control, started) {
            Conversation::Answered(result) => {
                self.release(worker);
                result
            }
            Conversation::Lost(failure) => {
                worker.stop();
                self.retire();
                Err(failure)
            }
        }
    }

    fn converse(
        &self,
        worker: &mut Worker,
        analysis: &str,
        params: &serde_json::Value,
        inputs: &[(String, DataFrame)],
        control: &Arc<CallControl>,
        started: Instant,
    ) -> Conversation {
        let crashed = |worker: &mut Worker| {
            let how = worker.reap();
            tracing::warn!(library = %self.library.display(), analysis, %how, "a plugin worker died during a call");
            Conversation::Lost(InvokeFailure {
                status: abi::STATUS_PANIC,
                message: format!(
                    "the plugin's worker process {how} during the call; the daemon serves on and a new worker takes the next call"
                ),
            })
        };
        let request = ToWorker::Invoke {
            analysis: analysis.to_owned(),
            params: params.clone(),
            roles: inputs.iter().map(|(role, _)| role.clone()).collect(),
        };
        let mut sent = protocol::write_message(&mut worker.input, &request);
        for (_, frame) in inputs {
            if sent.is_err() {
                break;
            }
            sent = protocol::write_table(&mut worker.input, frame);
        }
        if let Err(error) = sent {
            if error.kind() == std::io::ErrorKind::BrokenPipe {
                return crashed(worker);
            }
            return Conversation::Lost(InvokeFailure {
                status: abi::STATUS_INVALID_INPUT,
                message: format!("cannot pass the inputs to the plugin's worker: {error}"),
            });
        }

        let deadline = started + self.settings.call_timeout;
        let mut stopping: Option<(Stopped, Instant)> = None;
        let mut answer: Option<(serde_json::Value, Vec<String>)> = None;
        loop {
            let event = worker.events.recv_timeout(POLL);
            let frame = match event {
                Ok(Event::Frame(frame)) => frame,
                Ok(Event::Ended) | Err(RecvTimeoutError::Disconnected) => {
                    return match stopping {
                        Some((why, _)) => Conversation::Lost(self.stopped_failure(why, analysis)),
                        None => crashed(worker),
                    };
                }
                Err(RecvTimeoutError::Timeout) => {
                    if let Some((why, since)) = stopping {
                        if since.elapsed() > STOP_GRACE {
                            tracing::warn!(library = %self.library.display(), analysis, "a plugin worker did not stop when asked; killed");
                            return Conversation::Lost(self.stopped_failure(why, analysis));
                        }
                    } else if control.cancelled.load(Ordering::Relaxed) || Instant::now() > deadline {
                        let why = if control.cancelled.load(Ordering::Relaxed) {
                            Stopped::Cancelled
                        } else {
                            Stopped::Deadline
                        };
                        // Ask first: a plugin that checks its cancel flag stops cleanly and
                        // its worker stays usable.
                        let _ = protocol::write_message(&mut worker.input, &ToWorker::Cancel);
                        stopping = Some((why, Instant::now()));
                    }
                    continue;
                }
            };
            match frame {
                Frame::Json(bytes) => match protocol::decode_message::<FromWorker>(&bytes) {
                    Ok(FromWorker::Progress { fraction, message }) => control.record(fraction, &message),
                    Ok(FromWorker::Done { summary, warnings }) => answer = Some((summary, warnings)),
                    Ok(FromWorker::Failed { status, message }) => {
                        let failure = match &stopping {
                            Some((Stopped::Deadline, _)) => self.stopped_failure(Stopped::Deadline, analysis),
                            _ => InvokeFailure { status, message },
                        };
                        return Conversation::Answered(Err(failure));
                    }
                    Ok(other) => {
                        return Conversation::Lost(InvokeFailure {
                            status: abi::STATUS_PANIC,
                            message: format!("the plugin's worker answered out of turn ({other:?})"),
                        })
                    }
                    Err(error) => {
                        return Conversation::Lost(InvokeFailure {
                            status: abi::STATUS_PANIC,
                            message: format!("the plugin's worker sent an {error}"),
                        })
                    }
                },
                Frame::Table(bytes) => {
                    let Some((summary, warnings)) = answer.take() else {
                        return Conversation::Lost(InvokeFailure {
                            status: abi::STATUS_PANIC,
                            message: "the plugin's worker sent a table it did not announce".into(),
                        });
                    };
                    return match protocol::decode_table(bytes) {
                        Ok(table) => Conversation::Answered(Ok(InvokeSuccess {
                            table,
                            summary,
                            warnings,
                        })),
                        Err(error) => Conversation::Lost(InvokeFailure {
                            status: abi::STATUS_PANIC,
                            message: format!("the plugin's output table is unusable: {error}"),
                        }),
                    };
                }
            }
        }
    }

    fn stopped_failure(&self, why: Stopped, analysis: &str) -> InvokeFailure {
        match why {
            Stopped::Cancelled => InvokeFailure {
                status: abi::STATUS_CANCELLED,
                message: format!(
                    "cancelled by the client; the plugin did not stop within {} s, so its worker process was killed",
                    STOP_GRACE.as_secs()
                ),
            },
            Stopped::Deadline => InvokeFailure {
                status: abi::STATUS_PANIC,
                message: format!(
                    "{analysis} did not finish within {} s, the deadline of a call into an isolated plugin (--plugin-call-timeout); its worker process was stopped and the daemon serves on",
                    self.settings.call_timeout.as_secs_f64()
                ),
            },
        }
    }
}

/// The end of one call's exchange with a worker.
enum Conversation {
    /// The worker answered and stays usable.
    Answered(Result<InvokeSuccess, InvokeFailure>),
    /// The worker died, hung or broke the protocol; it is not used again.
    Lost(InvokeFailure),
}

#[cfg(all(test, unix))]
mod tests {
    use super::*;

    fn ended(script: &str) -> String {
        let status = Command::new("sh").args(["-c", script]).status().expect("sh runs");
        describe_exit(status)
    }

    #[test]
    fn a_worker_s_end_is_told_in_words() {
        assert_eq!(ended("exit 3"), "exited with code 3");
        assert_eq!(ended("kill -SEGV $$"), "killed by SIGSEGV (segmentation fault)");
        assert_eq!(ended("kill -ABRT $$"), "killed by SIGABRT (abort)");
        if cfg!(target_os = "linux") {
            assert_eq!(ended("kill -USR1 $$"), "killed by signal 10");
        }
    }
}
