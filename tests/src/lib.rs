//! Support for the end-to-end tests: build the daemon and the plugin libraries, start a
//! real `mobilisd` on a free port with its own workspace, and talk to it through the Rust
//! client, as users do.
//!
//! `cargo test` does not put the workspace's binaries and cdylibs where a daemon finds
//! them, so [`ensure_built`] runs `cargo build --workspace` once per test process (a no-op
//! when everything is fresh). A failure there fails the test with cargo's message; nothing
//! is skipped.

pub mod bench;
pub mod browser;
pub mod c_plugin;
pub mod hall_readings;
pub mod load;
pub mod node;

use mobilis_client::{Client, Daemon, DaemonOptions};
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

/// The workspace root.
pub fn workspace_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("tests/ is inside the workspace")
        .to_owned()
}

/// True when the slow checks are asked for: `MOBILIS_SLOW_TESTS=1`, the one switch of the
/// whole workspace (the plugins' unit tests read it the same way). Without it the tests run
/// their fast round counts; every test runs either way.
pub fn slow_tests() -> bool {
    std::env::var("MOBILIS_SLOW_TESTS").is_ok_and(|value| value == "1")
}

/// The directory holding the built binaries and plugin libraries (`target/debug`).
pub fn build_directory() -> PathBuf {
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| workspace_root().join("target"));
    let target = if target.is_absolute() {
        target
    } else {
        workspace_root().join(target)
    };
    target.join("debug")
}

/// Builds every binary and plugin library of the workspace (debug), once per process.
pub fn ensure_built() -> &'static Path {
    static BUILT: OnceLock<PathBuf> = OnceLock::new();
    BUILT.get_or_init(|| {
        let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
        let output = std::process::Command::new(cargo)
            .args(["build", "--workspace", "--bins", "--lib"])
            .current_dir(workspace_root())
            .output()
            .expect("cannot run cargo to build mobilisd and the plugins");
        assert!(
            output.status.success(),
            "building mobilisd and the plugins failed:\n{}",
            String::from_utf8_lossy(&output.stderr)
        );
        let directory = build_directory();
        assert!(
            directory.join("mobilisd").is_file(),
            "mobilisd is not in {}",
            directory.display()
        );
        directory
    })
}

/// The path of a plugin library built by this workspace (`libNAME.so` on Linux).
pub fn plugin_library(lib_name: &str) -> PathBuf {
    ensure_built().join(format!(
        "{}{lib_name}{}",
        std::env::consts::DLL_PREFIX,
        std::env::consts::DLL_SUFFIX
    ))
}

/// A temporary directory holding the Rust fixture plugin (as a link to the built library,
/// which is large in a debug build) and nothing else.
pub fn fixture_plugin_dir() -> tempfile::TempDir {
    let library = plugin_library("test_fixture_plugin");
    assert!(
        library.is_file(),
        "{} was not built; is tests/fixture-plugin a workspace member?",
        library.display()
    );
    let dir = tempfile::tempdir().expect("temporary directory");
    let link = dir.path().join(library.file_name().expect("a file name"));
    #[cfg(unix)]
    std::os::unix::fs::symlink(&library, &link).expect("link the fixture plugin");
    #[cfg(not(unix))]
    std::fs::copy(&library, &link).expect("copy the fixture plugin");
    dir
}

/// A daemon for one test, with its own workspace and data directory.
pub struct TestDaemon {
    pub daemon: Daemon,
    pub client: Client,
    /// The daemon's workspace (kept across [`TestDaemon::restart`]).
    pub workspace: PathBuf,
    /// A data root the test may write files into.
    pub data: PathBuf,
    options: DaemonOptions,
    _scratch: tempfile::TempDir,
}

impl TestDaemon {
    /// Starts `mobilisd` with the default plugins (those built next to it).
    pub async fn start() -> TestDaemon {
        Self::start_with(|_| {}).await
    }

    /// Starts `mobilisd` after `adjust` has changed its options.
    pub async fn start_with(adjust: impl FnOnce(&mut DaemonOptions)) -> TestDaemon {
        let directory = ensure_built();
        let scratch = tempfile::tempdir().expect("temporary directory");
        let workspace = scratch.path().join("workspace");
        let data = scratch.path().join("data");
        std::fs::create_dir_all(&data).expect("data directory");
        let mut options = DaemonOptions {
            binary: Some(directory.join("mobilisd")),
            workspace: Some(workspace.clone()),
            working_directory: Some(data.clone()),
            show_log: std::env::var_os("MOBILIS_TEST_LOG").is_some(),
            ..DaemonOptions::default()
        };
        adjust(&mut options);
        let (daemon, client) = launch(&options).await;
        TestDaemon {
            daemon,
            client,
            workspace,
            data,
            options,
            _scratch: scratch,
        }
    }

    /// Stops the daemon and starts a new one on the same workspace and options.
    pub async fn restart(self) -> TestDaemon {
        let TestDaemon {
            daemon,
            client,
            workspace,
            data,
            options,
            _scratch,
        } = self;
        drop(client);
        daemon.stop();
        let (daemon, client) = launch(&options).await;
        TestDaemon {
            daemon,
            client,
            workspace,
            data,
            options,
            _scratch,
        }
    }

    /// Calls a method and expects success.
    pub async fn call(&self, method: &str, params: serde_json::Value) -> serde_json::Value {
        match self.client.call(method, params.clone()).await {
            Ok(value) => value,
            Err(error) => panic!("{method} {params} failed: {error}"),
        }
    }

    /// Calls a method and expects a JSON-RPC error; returns (code, message).
    pub async fn call_error(&self, method: &str, params: serde_json::Value) -> (i32, String) {
        match self.client.call(method, params.clone()).await {
            Ok(value) => panic!("{method} {params} succeeded with {value}, an error was expected"),
            Err(mobilis_client::ClientError::Rpc { code, message, .. }) => (code, message),
            Err(other) => panic!("{method} {params}: transport failure {other}"),
        }
    }

    /// Calls a method that must be refused with `code` and a message carrying each of
    /// `words` (what a user reads to know what to change); returns the message.
    pub async fn call_refused(&self, method: &str, params: serde_json::Value, code: i32, words: &[&str]) -> String {
        let (got, message) = self.call_error(method, params.clone()).await;
        assert_eq!(got, code, "{method} {params}: {message}");
        for word in words {
            assert!(message.contains(word), "{method} {params}: `{message}` lacks `{word}`");
        }
        message
    }
}

/// Spawns the daemon of `options` and connects a client to it.
async fn launch(options: &DaemonOptions) -> (Daemon, Client) {
    let daemon = Daemon::spawn(options).expect("mobilisd starts");
    let client = Client::connect(daemon.url(), token_of(options))
        .await
        .expect("client connects");
    (daemon, client)
}

/// The `--token` a daemon was given, so that the test's client presents it.
fn token_of(options: &DaemonOptions) -> Option<&str> {
    let position = options.extra_arguments.iter().position(|a| a == "--token")?;
    options.extra_arguments.get(position + 1).map(String::as_str)
}

/// An invented van der Pauw sample of the end-to-end tests: name, sheet resistance (ohm/sq),
/// resistance ratio R_B/R_A, sheet Hall coefficient (m^2/C).
pub type InventedSample = (&'static str, f64, f64, f64);

/// Raw readings of `samples` at each of `temperatures_k` and +-0.5 T from the forward model,
/// with the offsets a real run has (thermoelectric voltages `offsets_v`, a Hall misalignment of
/// `misalignment` times the sheet resistance) and a little voltage noise (0.1 uV plus 1e-5
/// of the reading), seeded by `seed`.
pub fn van_der_pauw_run(
    samples: &[InventedSample],
    temperatures_k: &[f64],
    offsets_v: [f64; 6],
    misalignment: f64,
    seed: u64,
) -> Vec<mobilis_physics::readings::RawReading> {
    use mobilis_physics::forward::readings::{
        van_der_pauw_readings, MeasurementProtocol, VanDerPauwSample, VoltageNoise,
    };
    let mut rng = mobilis_numerics::noise::Rng::seeded(seed);
    let mut readings = Vec::new();
    for &(name, sheet, ratio, hall) in samples {
        for &temperature in temperatures_k {
            let mut sample = VanDerPauwSample::ideal(name, temperature, sheet, ratio, hall);
            sample.thermoelectric_offsets_v = offsets_v;
            sample.hall_misalignment_ohm = [misalignment * sheet, -misalignment * sheet];
            let mut protocol =
                MeasurementProtocol::van_der_pauw(1e-4, vec![0.5]).with_resistance_at_zero_and_hall_in_field();
            protocol.noise = VoltageNoise {
                absolute_v: 1e-7,
                relative: 1e-5,
            };
            readings.extend(van_der_pauw_readings(&sample, &protocol, &mut rng).expect("forward model"));
        }
    }
    readings
}

/// Readings as the inline JSON columns of `dataset.import`, in SI.
pub fn readings_json_columns(readings: &[mobilis_physics::readings::RawReading]) -> serde_json::Value {
    serde_json::json!({
        "sample": readings.iter().map(|r| r.sample.clone()).collect::<Vec<_>>(),
        "temperature_K": readings.iter().map(|r| r.temperature_k).collect::<Vec<_>>(),
        "field_T": readings.iter().map(|r| r.field_t).collect::<Vec<_>>(),
        "i_in": readings.iter().map(|r| r.i_in).collect::<Vec<_>>(),
        "i_out": readings.iter().map(|r| r.i_out).collect::<Vec<_>>(),
        "v_pos": readings.iter().map(|r| r.v_pos).collect::<Vec<_>>(),
        "v_neg": readings.iter().map(|r| r.v_neg).collect::<Vec<_>>(),
        "current_A": readings.iter().map(|r| r.current_a).collect::<Vec<_>>(),
        "voltage_V": readings.iter().map(|r| r.voltage_v).collect::<Vec<_>>(),
    })
}

/// Reads the `Content-Length` frames of a `mobilisd --stdio` on a thread, each body as
/// text, until the daemon's stdout closes. A frame without a numeric `Content-Length` or
/// cut short ends the reading with a panic on that thread, which names the fault and drops
/// the sender, so that a test waiting on the receiver fails at once rather than at its
/// timeout.
pub fn read_stdio_frames(stdout: impl std::io::Read + Send + 'static) -> std::sync::mpsc::Receiver<String> {
    use std::io::{BufRead, Read};
    let (sender, receiver) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        let mut reader = std::io::BufReader::new(stdout);
        loop {
            let mut length = None;
            loop {
                let mut line = String::new();
                if reader.read_line(&mut line).unwrap_or(0) == 0 {
                    return;
                }
                let line = line.trim_end();
                if line.is_empty() {
                    break;
                }
                if let Some(value) = line.strip_prefix("Content-Length:") {
                    let value = value.trim();
                    let parsed = value.parse::<usize>();
                    length = Some(parsed.unwrap_or_else(|_| panic!("Content-Length `{value}` is not a number")));
                }
            }
            let mut body = vec![0; length.expect("every frame has a Content-Length")];
            reader.read_exact(&mut body).expect("the announced body arrives");
            if sender.send(String::from_utf8_lossy(&body).into_owned()).is_err() {
                return;
            }
        }
    });
    receiver
}

/// What one run of the `mobilis` command line printed, and whether it succeeded.
pub struct CliRun {
    pub success: bool,
    pub stdout: String,
    pub stderr: String,
}

/// Runs the real `mobilis` against the daemon at `url`, with `--progress` as given (`never`,
/// `always`, `auto`), as a user types it.
pub fn run_cli(url: &str, progress: &str, arguments: &[&str]) -> CliRun {
    let output = std::process::Command::new(ensure_built().join("mobilis"))
        .args(["--url", url, "--progress", progress])
        .args(arguments)
        .output()
        .expect("mobilis runs");
    CliRun {
        success: output.status.success(),
        stdout: String::from_utf8_lossy(&output.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&output.stderr).into_owned(),
    }
}

/// A float column of a `dataset.rows` answer.
pub fn float_column(page: &serde_json::Value, name: &str) -> Vec<Option<f64>> {
    page["columns"][name]
        .as_array()
        .unwrap_or_else(|| panic!("column {name} missing from {page}"))
        .iter()
        .map(|v| v.as_f64())
        .collect()
}

/// A string column of a `dataset.rows` answer.
pub fn string_column(page: &serde_json::Value, name: &str) -> Vec<Option<String>> {
    page["columns"][name]
        .as_array()
        .unwrap_or_else(|| panic!("column {name} missing from {page}"))
        .iter()
        .map(|v| v.as_str().map(str::to_owned))
        .collect()
}
