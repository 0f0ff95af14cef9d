//! `mobilisd`: starts the daemon. See `mobilisd --help`.

use anyhow::{bail, Context};
use clap::Parser;
use mobilis_rpc::compute_slots::ComputeSlots;
use mobilis_rpc::data_roots::DataRoots;
use mobilis_rpc::plugin_host::{Isolation, PluginHost};
use mobilis_rpc::plugin_supervisor::WorkerSettings;
use mobilis_rpc::service::Service;
use mobilis_rpc::store::DatasetStore;
use mobilis_rpc::transport::{self, AccessPolicy};
use mobilis_rpc::workspace_lock::WorkspaceLock;
use std::io::Write;
use std::net::SocketAddr;
use std::path::PathBuf;
use std::sync::Arc;

/// The mobilis analysis daemon: datasets, analysis plugins, JSON-RPC.
#[derive(Parser, Debug)]
#[command(name = "mobilisd", version)]
struct Arguments {
    /// Address to listen on (HTTP and WebSocket on one port); port 0 picks a free port.
    #[arg(long, default_value = "127.0.0.1:8470")]
    listen: SocketAddr,
    /// Directory where datasets persist.
    #[arg(long, default_value = "mobilis-workspace")]
    workspace: PathBuf,
    /// Directory of plugin libraries (repeatable), each run isolated in worker processes.
    /// Default, without this or --trusted-plugin-dir: the mobilis plugins built next to this binary, in process.
    #[arg(long = "plugin-dir")]
    plugin_dirs: Vec<PathBuf>,
    /// Directory of plugin libraries (repeatable) loaded into the daemon's own process: faster, but a crash of such a plugin is a crash of the daemon.
    #[arg(long = "trusted-plugin-dir")]
    trusted_plugin_dirs: Vec<PathBuf>,
    /// Seconds a call into an isolated plugin may run before its worker is stopped.
    #[arg(long = "plugin-call-timeout", default_value_t = 600.0)]
    plugin_call_timeout: f64,
    /// Runs as the worker process of one isolated plugin library (started by the daemon itself).
    #[arg(long = "plugin-worker", hide = true)]
    plugin_worker: Option<PathBuf>,
    /// Serve JSON-RPC on stdin/stdout with Content-Length framing instead of the network.
    #[arg(long)]
    stdio: bool,
    /// A directory path imports and exports may use (repeatable), besides the start directory. The workspace is never one.
    #[arg(long = "data-root")]
    data_roots: Vec<PathBuf>,
    /// A web origin allowed to call (repeatable), for example http://localhost:3000.
    #[arg(long = "allow-origin")]
    allowed_origins: Vec<String>,
    /// Bearer token clients must present; required when listening beyond loopback. Prefer the
    /// environment variable MOBILIS_TOKEN: every local user can read a command line.
    #[arg(long, env = "MOBILIS_TOKEN", hide_env_values = true)]
    token: Option<String>,
    /// Memory budget for stored tables, for example 4GiB or 512MiB; imports and analysis
    /// outputs past it are refused. Default: half of the machine's memory.
    #[arg(long = "memory-budget", value_parser = mobilis_rpc::store::memory::parse_size)]
    memory_budget: Option<u64>,
    /// Heavy calls (analyses, pipelines, imports, exports, rows, figures, reports) running at once; more wait their turn. Default: one per CPU.
    #[arg(long = "compute-slots", value_parser = clap::value_parser!(u16).range(1..=1024))]
    compute_slots: Option<u16>,
}

fn main() -> anyhow::Result<()> {
    let arguments = Arguments::parse();
    // Logs go to stderr: stdout carries the ready line, or the stdio transport.
    tracing_subscriber::fmt()
        .with_writer(std::io::stderr)
        // Colour only for a person at a terminal, never into a redirected log file.
        .with_ansi(std::io::IsTerminal::is_terminal(&std::io::stderr()))
        .with_env_filter(
            tracing_subscriber::EnvFilter::try_from_env("MOBILIS_LOG")
                .unwrap_or_else(|_| tracing_subscriber::EnvFilter::new("info")),
        )
        .init();

    if let Some(library) = &arguments.plugin_worker {
        std::process::exit(mobilis_rpc::plugin_worker::run(library));
    }

    if let Some(token) = &arguments.token {
        if let Err(problem) = transport::check_token_setting(token) {
            bail!("{problem}");
        }
        // clap reads MOBILIS_TOKEN too; a token that is not the environment's came from the command line.
        if std::env::var("MOBILIS_TOKEN").ok().as_deref() != Some(token.as_str()) {
            tracing::warn!("the token was given with --token, which every user of this machine can read in the process list; set MOBILIS_TOKEN in the daemon's environment instead");
        }
    }
    if !arguments.stdio && !arguments.listen.ip().is_loopback() && arguments.token.is_none() {
        bail!(
            "listening on {} reaches beyond this machine; pass --token (or set MOBILIS_TOKEN) so that only clients holding it can call",
            arguments.listen
        );
    }

    std::fs::create_dir_all(&arguments.workspace)
        .with_context(|| format!("cannot create the workspace {}", arguments.workspace.display()))?;
    let workspace = arguments.workspace.canonicalize()?;
    // Held until the process ends: a second daemon on this workspace refuses to start.
    let _workspace_lock = WorkspaceLock::acquire(&workspace)?;
    let store =
        DatasetStore::open(&workspace).with_context(|| format!("cannot open the workspace {}", workspace.display()))?;
    if let Some(budget) = arguments.memory_budget {
        store.set_memory_budget(budget);
    }

    if !(arguments.plugin_call_timeout.is_finite() && arguments.plugin_call_timeout > 0.0) {
        bail!(
            "--plugin-call-timeout {} is not a number of seconds above zero; give for example 600",
            arguments.plugin_call_timeout
        );
    }
    let call_timeout = std::time::Duration::from_secs_f64(arguments.plugin_call_timeout.min(1e9));
    let mut host = PluginHost::default().with_workers(WorkerSettings::new(std::env::current_exe()?, call_timeout));
    if arguments.plugin_dirs.is_empty() && arguments.trusted_plugin_dirs.is_empty() {
        let exe = std::env::current_exe()?;
        let beside = exe.parent().context("the binary has no directory")?;
        // Only mobilis's own plugin libraries: a build directory holds other shared objects too.
        host.load_dir(beside, |file| {
            file.starts_with("libmobilis_") || file.starts_with("mobilis_")
        });
    } else {
        for dir in &arguments.trusted_plugin_dirs {
            host.load_dir_as(dir, Isolation::InProcess, |_| true);
        }
        for dir in &arguments.plugin_dirs {
            host.load_dir_as(dir, Isolation::Isolated, |_| true);
        }
    }

    let start_directory = std::env::current_dir()?;
    // The workspace is not a data root: no import or export may touch the daemon's files.
    let mut roots = vec![start_directory];
    roots.extend(arguments.data_roots.iter().cloned());
    let service = Arc::new(Service::new(store, host, DataRoots::new(roots), workspace));
    let slots = match arguments.compute_slots {
        Some(count) => ComputeSlots::new(count.into()),
        None => ComputeSlots::per_core(),
    };
    tracing::info!(
        compute_slots = slots.count(),
        "heavy calls run at most this many at once"
    );
    let module = mobilis_rpc::methods::module_with_slots(service, slots);

    let runtime = tokio::runtime::Builder::new_multi_thread().enable_all().build()?;
    runtime.block_on(async move {
        if arguments.stdio {
            tracing::info!("serving JSON-RPC on stdio");
            transport::serve_stdio(module).await?;
            return Ok(());
        }
        let policy = AccessPolicy {
            allowed_origins: arguments.allowed_origins,
            token: arguments.token,
        };
        let (address, handle) = transport::serve_http(arguments.listen, module, policy)
            .await
            .with_context(|| format!("cannot listen on {}", arguments.listen))?;
        println!("listening on http://{address}");
        std::io::stdout().flush()?;
        tracing::info!(%address, "ready");
        let stopped = handle.clone();
        tokio::select! {
            _ = stopped.stopped() => {}
            _ = shutdown_signal() => {
                tracing::info!("shutting down");
                handle.stop();
                handle.stopped().await;
            }
        }
        anyhow::Ok(())
    })
}

async fn shutdown_signal() {
    let interrupt = tokio::signal::ctrl_c();
    #[cfg(unix)]
    {
        let mut terminate =
            tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()).expect("signal handler");
        tokio::select! {
            _ = interrupt => {}
            _ = terminate.recv() => {}
        }
    }
    #[cfg(not(unix))]
    {
        let _ = interrupt.await;
    }
}
