//! The worker side of plugin isolation: `mobilisd --plugin-worker LIB` loads one plugin
//! library and serves the daemon's calls to it over stdin and stdout
//! ([`crate::worker_protocol`]), one call at a time.
//!
//! The protocol owns the worker's original stdout; file descriptor 1 is pointed at stderr,
//! so that a plugin that prints (`printf`, `println!`) writes to the daemon's log instead of
//! corrupting the stream. The worker exits when its stdin ends, even with a plugin hung in a
//! call: the daemon has then gone, or has given up on it.

use crate::plugin_host::{self, CallControl, OpenedLibrary};
use crate::worker_protocol::{self as protocol, Frame, FromWorker, ToWorker};
use mobilis_sdk::table_ffi::TextLayout;
use polars::prelude::DataFrame;
use std::fs::File;
use std::io::{BufReader, BufWriter, Write};
use std::path::Path;
use std::sync::atomic::Ordering;
use std::sync::mpsc;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

/// Progress goes to the daemon at most this often (the daemon throttles again for clients).
const PROGRESS_INTERVAL: Duration = Duration::from_millis(50);

type Output = Arc<Mutex<BufWriter<File>>>;

/// One call as the reading thread hands it over.
struct Call {
    analysis: String,
    params: serde_json::Value,
    inputs: Vec<(String, DataFrame)>,
}

/// Serves one library until stdin ends. Returns the process exit code.
pub fn run(library: &Path) -> i32 {
    let output: Output = match take_stdout() {
        Ok(file) => Arc::new(Mutex::new(BufWriter::new(file))),
        Err(error) => {
            tracing::error!(%error, "the plugin worker cannot set up its output");
            return 70;
        }
    };
    let send = |message: &FromWorker| {
        let mut out = output.lock().unwrap_or_else(|p| p.into_inner());
        protocol::write_message(&mut *out, message)
    };
    let OpenedLibrary {
        identity,
        declaration,
        functions,
    } = match plugin_host::open_in_process(library) {
        Ok(opened) => opened,
        Err(reason) => {
            let _ = send(&FromWorker::Refused { reason });
            return 0;
        }
    };
    let layout = TextLayout::for_features(&declaration.features);
    let declaration = serde_json::to_string(&declaration).expect("a declaration serialises");
    if send(&FromWorker::Ready {
        name: identity.name,
        version: identity.version,
        abi_minor: identity.abi_minor,
        declaration,
    })
    .is_err()
    {
        return 0;
    }

    // The running call's control, for the reading thread to cancel.
    let current: Arc<Mutex<Option<Arc<CallControl>>>> = Arc::default();
    let (calls, incoming) = mpsc::channel::<Call>();
    {
        let current = Arc::clone(&current);
        std::thread::spawn(move || read_requests(calls, current));
    }

    for call in incoming {
        let control = progress_control(Arc::clone(&output));
        *current.lock().unwrap_or_else(|p| p.into_inner()) = Some(Arc::clone(&control));
        let result =
            plugin_host::invoke_functions(&functions, layout, &call.analysis, &call.params, &call.inputs, &control);
        drop(call);
        // Cleared before answering, so that a cancel arriving after the answer finds no call.
        *current.lock().unwrap_or_else(|p| p.into_inner()) = None;
        let mut out = output.lock().unwrap_or_else(|p| p.into_inner());
        let written = match result {
            Ok(success) => protocol::write_message(
                &mut *out,
                &FromWorker::Done {
                    summary: success.summary,
                    warnings: success.warnings,
                },
            )
            .and_then(|_| protocol::write_table(&mut *out, &success.table)),
            Err(failure) => protocol::write_message(
                &mut *out,
                &FromWorker::Failed {
                    status: failure.status,
                    message: failure.message,
                },
            ),
        };
        if written.is_err() {
            return 0;
        }
    }
    0
}

/// Reads the daemon's messages: calls go to the main thread, cancels set the running call's
/// flag at once. The end of stdin ends the process.
fn read_requests(calls: mpsc::Sender<Call>, current: Arc<Mutex<Option<Arc<CallControl>>>>) {
    let mut input = BufReader::new(std::io::stdin().lock());
    loop {
        let message = match protocol::read_frame(&mut input) {
            Ok(Some(Frame::Json(bytes))) => protocol::decode_message::<ToWorker>(&bytes),
            Ok(Some(Frame::Table(_))) => Err("a table nobody announced".to_owned()),
            Ok(None) => std::process::exit(0),
            Err(error) => Err(error.to_string()),
        };
        match message {
            Ok(ToWorker::Cancel) => {
                if let Some(control) = current.lock().unwrap_or_else(|p| p.into_inner()).as_ref() {
                    control.cancelled.store(true, Ordering::Relaxed);
                }
            }
            Ok(ToWorker::Invoke {
                analysis,
                params,
                roles,
            }) => {
                let mut inputs = Vec::with_capacity(roles.len());
                for role in roles {
                    let table = match protocol::read_frame(&mut input) {
                        Ok(Some(Frame::Table(bytes))) => protocol::decode_table(bytes),
                        _ => Err("the input tables of a call are missing".to_owned()),
                    };
                    match table {
                        Ok(table) => inputs.push((role, table)),
                        Err(reason) => stop(&reason),
                    }
                }
                if calls
                    .send(Call {
                        analysis,
                        params,
                        inputs,
                    })
                    .is_err()
                {
                    std::process::exit(0);
                }
            }
            Err(reason) => stop(&reason),
        }
    }
}

/// The daemon and the worker no longer understand each other: the worker ends, and the
/// daemon reports the call as lost.
fn stop(reason: &str) -> ! {
    tracing::error!(reason, "the plugin worker received an unreadable request");
    std::process::exit(70)
}

/// A call control whose progress goes to the daemon, throttled.
fn progress_control(output: Output) -> Arc<CallControl> {
    let last = Mutex::new(None::<Instant>);
    Arc::new(CallControl::with_listener(Box::new(move |fraction, message| {
        let mut last = last.lock().unwrap_or_else(|p| p.into_inner());
        if last.is_some_and(|at| at.elapsed() < PROGRESS_INTERVAL) && fraction < 1.0 {
            return;
        }
        *last = Some(Instant::now());
        let mut out = output.lock().unwrap_or_else(|p| p.into_inner());
        let _ = protocol::write_message(
            &mut *out,
            &FromWorker::Progress {
                fraction,
                message: message.to_owned(),
            },
        );
    })))
}

/// Takes the process's stdout for the protocol and points file descriptor 1 at stderr.
#[cfg(unix)]
fn take_stdout() -> std::io::Result<File> {
    use std::os::fd::AsFd;
    std::io::stdout().flush()?;
    let protocol_out = std::io::stdout().as_fd().try_clone_to_owned()?;
    // SAFETY: dup2 on two descriptors this process owns; 1 is replaced atomically (POSIX
    // dup2), and std's stdout keeps writing to descriptor 1, now the log.
    if unsafe { libc::dup2(2, 1) } < 0 {
        return Err(std::io::Error::last_os_error());
    }
    Ok(File::from(protocol_out))
}

#[cfg(not(unix))]
fn take_stdout() -> std::io::Result<File> {
    Err(std::io::Error::other("plugin isolation needs a Unix system"))
}
