//! Loading plugin libraries and calling their analyses through the C ABI.
//!
//! **Architecture Invariant.** Libraries are never unloaded while the daemon runs: the
//! Arrow release callbacks of every table a plugin produced run code inside it, and such
//! tables live in the dataset store for as long as the daemon does.
//!
//! A library is refused, with its file name and the reason, when it lacks the entry
//! symbol, reports another ABI major version, leaves one of its functions NULL in the
//! descriptor, returns an unusable declaration, declares a parameter schema the host cannot
//! validate, or offers an analysis whose name is already taken. A refused library is never
//! half-registered; the daemon keeps serving.
//!
//! A plugin runs in process (the daemon's own plugins, `--trusted-plugin-dir`) or isolated
//! in worker processes (`--plugin-dir`, see [`crate::plugin_supervisor`]); [`PluginHost::invoke`]
//! is the same call for both. Before any library is mapped, here or in a worker, its ELF
//! headers are checked against its size ([`crate::library_check`]).

use mobilis_sdk::param_schema;
// The types of one call live below the host and the worker pool, which both use them.
pub use crate::plugin_call::{
    CallControl, InvokeFailure, InvokeSuccess, PluginIdentity, ProgressListener, ProgressSpan,
};
use crate::plugin_supervisor::{WorkerPool, WorkerSettings};
use mobilis_sdk::abi::{
    self, AnalysisDeclaration, DescriptorError, EntryFn, HostContext, InputTable, InvokeOutput, PluginDeclaration,
    PluginFunctions,
};
use mobilis_sdk::sdk;
use mobilis_sdk::table_ffi::{self, TextLayout};
use polars::prelude::DataFrame;
use std::collections::BTreeMap;
use std::ffi::{CStr, CString};
use std::os::raw::{c_char, c_void};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::sync::atomic::Ordering;
use std::sync::Arc;

/// A plugin library that loaded.
pub struct LoadedPlugin {
    pub name: String,
    pub version: String,
    pub abi_minor: u32,
    pub file: PathBuf,
    pub features: Vec<String>,
    pub analyses: Vec<String>,
    /// Where the plugin's code runs.
    pub isolation: Isolation,
    backend: Backend,
}

/// Where a plugin's code runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Isolation {
    /// Mapped into the daemon: fastest, and a crash of the plugin is a crash of the daemon.
    InProcess,
    /// In supervised worker processes: a crash, exit or hang fails one call.
    Isolated,
}

impl Isolation {
    /// The name clients see (`plugin.list`, `server.info`).
    pub fn as_str(self) -> &'static str {
        match self {
            Isolation::InProcess => "in_process",
            Isolation::Isolated => "isolated",
        }
    }
}

/// How calls reach a plugin.
enum Backend {
    InProcess(PluginFunctions),
    Isolated(Box<WorkerPool>),
}

/// A library opened in this process and checked up to its declaration.
pub struct OpenedLibrary {
    pub identity: PluginIdentity,
    pub declaration: PluginDeclaration,
    /// The descriptor's functions, each checked non-NULL.
    pub functions: PluginFunctions,
}

/// A library that was refused, and why.
#[derive(Debug, Clone)]
pub struct RefusedPlugin {
    pub file: PathBuf,
    pub reason: String,
}

/// One analysis and the plugin that serves it.
pub struct RegisteredAnalysis {
    pub declaration: AnalysisDeclaration,
    pub plugin_index: usize,
}

/// All plugins of the daemon.
#[derive(Default)]
pub struct PluginHost {
    pub plugins: Vec<LoadedPlugin>,
    pub refused: Vec<RefusedPlugin>,
    pub analyses: BTreeMap<String, RegisteredAnalysis>,
    /// How isolated plugins run; without it every library loads in process.
    workers: Option<WorkerSettings>,
}

/// The platform's file name suffix of shared libraries.
pub fn is_shared_library(path: &Path) -> bool {
    let extension = path.extension().and_then(|e| e.to_str()).unwrap_or("");
    matches!(extension, "so" | "dylib" | "dll")
}

/// The shared libraries of `dir` whose file name passes `accept`, sorted.
fn library_files(dir: &Path, accept: impl Fn(&str) -> bool) -> Result<Vec<PathBuf>, RefusedPlugin> {
    let mut files: Vec<PathBuf> = match std::fs::read_dir(dir) {
        Ok(entries) => entries.filter_map(|e| e.ok().map(|e| e.path())).collect(),
        Err(error) => {
            return Err(RefusedPlugin {
                file: dir.to_owned(),
                reason: format!("cannot read the plugin directory: {error}"),
            })
        }
    };
    files.retain(|file| {
        let name = file.file_name().and_then(|n| n.to_str()).unwrap_or("");
        is_shared_library(file) && accept(name)
    });
    files.sort();
    Ok(files)
}

/// Opens a library in this process: checks its file, maps it, calls its entry function and
/// reads its declaration. The library stays mapped whatever happens after (see the module
/// documentation).
pub fn open_in_process(file: &Path) -> Result<OpenedLibrary, String> {
    // A truncated file would fault inside the loader (SIGBUS), so its headers are read first.
    crate::library_check::check_library(file).map_err(|reason| format!("refused before loading: {reason}"))?;
    // SAFETY: loading a library runs its initialisers. In the daemon, only libraries its
    // starter trusts (its own, --trusted-plugin-dir, after a trial load in a worker) get
    // here; in a worker process a faulty one takes only that worker down.
    let library = unsafe { libloading::Library::new(file) }.map_err(|e| load_failure(file, &e))?;
    // SAFETY: the symbol's type is fixed by the ABI; a library exporting the name with
    // another type breaks the ABI contract, which no check can detect.
    let entry: EntryFn = unsafe { library.get::<EntryFn>(abi::ENTRY_SYMBOL.as_bytes()) }
        .map(|symbol| *symbol)
        .map_err(|_| format!("no entry symbol `{}`: not a mobilis plugin", abi::ENTRY_SYMBOL))?;
    // Never unload: see the module documentation.
    std::mem::forget(library);

    // No catch_unwind around this or any other call into a plugin: unwinding out of an
    // `extern "C"` function aborts the process before any host frame could catch it. The
    // host relies instead on the plugin catching its own panics (the SDK does, and refuses
    // to build with `panic = "abort"`) and, for libraries it does not trust, on running
    // them in worker processes (`crate::plugin_supervisor`), where an abort ends one call.
    // SAFETY: calling the entry function is the ABI's first step; it returns a pointer to
    // a static descriptor or NULL.
    let descriptor_pointer = unsafe { entry() };
    // Read under the ABI's minor-version rule: the major version through a raw pointer
    // before anything else, then only the fields the plugin's minor declares, every
    // function checked non-NULL.
    // SAFETY: what the entry function returned, which the ABI makes NULL or a static
    // descriptor holding at least the fields its minor declares.
    let fields = unsafe { abi::read_descriptor(descriptor_pointer) }.map_err(|error| match error {
        DescriptorError::NullFunction { ref plugin, .. } => {
            let file_name = file.file_name().unwrap_or(file.as_os_str()).to_string_lossy();
            format!("plugin `{plugin}` ({file_name}): {error}")
        }
        other => other.to_string(),
    })?;
    let name = static_str(fields.plugin_name).ok_or("the plugin name is missing or not valid UTF-8")?;
    let version = static_str(fields.plugin_version).ok_or("the plugin version is missing or not valid UTF-8")?;
    let declaration = describe(&fields.functions)?;
    Ok(OpenedLibrary {
        identity: PluginIdentity {
            name: name.to_owned(),
            version: version.to_owned(),
            abi_minor: fields.abi_minor,
        },
        declaration,
        functions: fields.functions,
    })
}

impl PluginHost {
    /// Loads every shared library of `dir` whose file name passes `accept` into this process
    /// (the daemon's own plugins); each refusal is recorded, none stops the others.
    pub fn load_dir(&mut self, dir: &Path, accept: impl Fn(&str) -> bool) {
        let files = match library_files(dir, accept) {
            Ok(files) => files,
            Err(refusal) => return self.refused.push(refusal),
        };
        for file in files {
            if let Err(reason) = self.load(&file) {
                tracing::warn!(file = %file.display(), %reason, "plugin refused");
                self.refused.push(RefusedPlugin { file, reason });
            }
        }
    }

    /// Loads one library into this process. On error nothing of it is registered (the
    /// library itself may stay mapped: unloading is never safe once its code ran).
    pub fn load(&mut self, file: &Path) -> Result<(), String> {
        let opened = open_in_process(file)?;
        self.register(
            file,
            opened.identity,
            opened.declaration,
            Backend::InProcess(opened.functions),
        )
    }

    /// Loads one library into this process after a short-lived worker process has loaded
    /// it first, so that a library whose initialisers crash is refused instead of taking
    /// the daemon down. Without a worker program (see [`PluginHost::with_workers`]) this
    /// is [`PluginHost::load`].
    pub fn load_probed(&mut self, file: &Path) -> Result<(), String> {
        if let Some(settings) = &self.workers {
            crate::plugin_supervisor::probe(settings, file)?;
        }
        self.load(file)
    }

    /// Registers one library served by supervised worker processes: it is never mapped into
    /// this process. Needs a worker program (see [`PluginHost::with_workers`]).
    pub fn load_isolated(&mut self, file: &Path) -> Result<(), String> {
        let settings = self
            .workers
            .clone()
            .ok_or("isolated plugins need the daemon's worker program, and none is set")?;
        let (pool, identity, declaration) = crate::plugin_supervisor::WorkerPool::start(settings, file)?;
        self.register(file, identity, declaration, Backend::Isolated(Box::new(pool)))
    }

    /// Loads every shared library of `dir` whose file name passes `accept`, in `isolation`;
    /// each refusal is recorded, none stops the others. An in-process library from a
    /// directory other than the daemon's own is probed in a worker first.
    pub fn load_dir_as(&mut self, dir: &Path, isolation: Isolation, accept: impl Fn(&str) -> bool) {
        let files = match library_files(dir, accept) {
            Ok(files) => files,
            Err(refusal) => return self.refused.push(refusal),
        };
        for file in files {
            let loaded = match isolation {
                Isolation::InProcess => self.load_probed(&file),
                Isolation::Isolated => self.load_isolated(&file),
            };
            if let Err(reason) = loaded {
                tracing::warn!(file = %file.display(), %reason, "plugin refused");
                self.refused.push(RefusedPlugin { file, reason });
            }
        }
    }

    /// Sets how isolated plugins run: the program started as a worker and the deadline of
    /// each call.
    pub fn with_workers(mut self, settings: WorkerSettings) -> Self {
        self.workers = Some(settings);
        self
    }

    fn register(
        &mut self,
        file: &Path,
        identity: PluginIdentity,
        declaration: PluginDeclaration,
        backend: Backend,
    ) -> Result<(), String> {
        let mut seen = std::collections::BTreeSet::new();
        for analysis in &declaration.analyses {
            if let Some(existing) = self.analyses.get(&analysis.name) {
                let owner = &self.plugins[existing.plugin_index];
                return Err(format!(
                    "analysis `{}` is already provided by plugin `{}` ({})",
                    analysis.name,
                    owner.name,
                    owner.file.display()
                ));
            }
            if !seen.insert(analysis.name.clone()) {
                return Err(format!("analysis `{}` is declared twice", analysis.name));
            }
            param_schema::check_supported(&analysis.params, &analysis.name)?;
        }

        let plugin_index = self.plugins.len();
        let analyses: Vec<String> = declaration.analyses.iter().map(|a| a.name.clone()).collect();
        for analysis in declaration.analyses {
            self.analyses.insert(
                analysis.name.clone(),
                RegisteredAnalysis {
                    declaration: analysis,
                    plugin_index,
                },
            );
        }
        let isolation = match backend {
            Backend::InProcess(_) => Isolation::InProcess,
            Backend::Isolated(_) => Isolation::Isolated,
        };
        tracing::info!(
            plugin = identity.name,
            version = identity.version,
            file = %file.display(),
            isolation = isolation.as_str(),
            analyses = ?analyses,
            "plugin loaded"
        );
        self.plugins.push(LoadedPlugin {
            name: identity.name,
            version: identity.version,
            abi_minor: identity.abi_minor,
            file: file.to_owned(),
            features: declaration.features,
            analyses,
            isolation,
            backend,
        });
        Ok(())
    }

    /// The plugin serving an analysis.
    pub fn plugin_of(&self, analysis: &str) -> Option<&LoadedPlugin> {
        self.analyses
            .get(analysis)
            .map(|entry| &self.plugins[entry.plugin_index])
    }

    /// Calls an analysis with named input tables. Blocking: run it off the async runtime.
    pub fn invoke(
        &self,
        analysis: &str,
        params: &serde_json::Value,
        inputs: &[(String, DataFrame)],
        control: &Arc<CallControl>,
    ) -> Result<InvokeSuccess, InvokeFailure> {
        let failure = |status: i32, message: String| InvokeFailure { status, message };
        let entry = self
            .analyses
            .get(analysis)
            .ok_or_else(|| failure(abi::STATUS_UNKNOWN_ANALYSIS, format!("no analysis `{analysis}`")))?;
        let plugin = &self.plugins[entry.plugin_index];
        let success = match &plugin.backend {
            Backend::InProcess(functions) => {
                let layout = TextLayout::for_features(&plugin.features);
                invoke_functions(functions, layout, analysis, params, inputs, control)
            }
            Backend::Isolated(pool) => pool.invoke(analysis, params, inputs, control),
        }?;
        check_declared_output(&plugin.name, &entry.declaration, &success)?;
        Ok(success)
    }
}

/// Holds every output to its declaration, whichever SDK (or none) built it: a client
/// reads columns and summary keys by their declared names and types, so a mismatch is the
/// plugin's bug, reported as such (nothing is stored from a refused output).
fn check_declared_output(
    plugin: &str,
    declaration: &AnalysisDeclaration,
    success: &InvokeSuccess,
) -> Result<(), InvokeFailure> {
    let empty = serde_json::Map::new();
    let summary = match &success.summary {
        serde_json::Value::Object(map) => map,
        serde_json::Value::Null => &empty,
        other => {
            return Err(InvokeFailure {
                status: abi::STATUS_PANIC,
                message: format!("plugin `{plugin}` returned a summary that is not an object: {other}"),
            })
        }
    };
    sdk::check_output(declaration, &success.table, summary).map_err(|violation| InvokeFailure {
        status: abi::STATUS_PANIC,
        message: format!(
            "plugin `{plugin}` broke the declaration of `{}`: {violation}",
            declaration.name
        ),
    })
}

/// Calls an analysis of a library loaded in this process, its input text in `layout` (see
/// [`TextLayout::for_features`]). Blocking.
pub fn invoke_functions(
    functions: &PluginFunctions,
    layout: TextLayout,
    analysis: &str,
    params: &serde_json::Value,
    inputs: &[(String, DataFrame)],
    control: &Arc<CallControl>,
) -> Result<InvokeSuccess, InvokeFailure> {
    let failure = |status: i32, message: String| InvokeFailure { status, message };

    let analysis_c =
        CString::new(analysis).map_err(|_| failure(abi::STATUS_INVALID_INPUT, "NUL in analysis name".into()))?;
    let params_c =
        CString::new(params.to_string()).map_err(|_| failure(abi::STATUS_INVALID_INPUT, "NUL in parameters".into()))?;
    let mut roles = Vec::with_capacity(inputs.len());
    let mut exported = Vec::with_capacity(inputs.len());
    for (role, frame) in inputs {
        roles.push(CString::new(role.as_str()).map_err(|_| failure(abi::STATUS_INVALID_INPUT, "NUL in role".into()))?);
        let (schema, array) = table_ffi::export_frame_as(frame, layout)
            .map_err(|error| failure(abi::STATUS_INVALID_INPUT, format!("input `{role}`: {error}")))?;
        exported.push((Box::new(schema), Box::new(array)));
    }
    let tables: Vec<InputTable> = roles
        .iter()
        .zip(exported.iter_mut())
        .map(|(role, (schema, array))| InputTable {
            role: role.as_ptr(),
            schema: &mut **schema,
            array: &mut **array,
        })
        .collect();
    let context = HostContext {
        host_data: Arc::as_ptr(control) as *mut c_void,
        report_progress: Some(report_progress),
        is_cancelled: Some(is_cancelled),
    };
    let mut output = InvokeOutput::empty();

    // SAFETY: every pointer is valid for the call: the C strings, the input tables (owned
    // by `exported`, which outlives the call), the context (whose host_data points into
    // `control`, kept alive by the caller's Arc) and the zero-initialised output. A panic
    // cannot come back from here (see `open_in_process`): the plugin catches its own.
    let status = unsafe {
        (functions.invoke)(
            analysis_c.as_ptr(),
            params_c.as_ptr(),
            tables.as_ptr(),
            tables.len(),
            &context,
            &mut output,
        )
    };
    // Inputs the plugin did not take over are released here, when `exported` drops.
    drop(tables);
    drop(exported);

    let result_json = take_plugin_string(functions, &mut output.result_json);
    let error_message = take_plugin_string(functions, &mut output.error_message);
    if status != abi::STATUS_OK {
        // A failed call leaves the output empty or, if the plugin wrote one anyway, its
        // release callbacks free it when `output` drops.
        let message = error_message.unwrap_or_else(|| format!("the plugin failed with status {status} and no message"));
        return Err(failure(status, message));
    }
    let array = std::mem::replace(&mut output.array, polars_arrow::ffi::ArrowArray::empty());
    let schema = std::mem::replace(&mut output.schema, polars_arrow::ffi::ArrowSchema::empty());
    if schema.is_null() {
        return Err(failure(
            abi::STATUS_PANIC,
            "the plugin reported success but wrote no output table".into(),
        ));
    }
    // SAFETY: the plugin wrote a schema and array per the ABI; its library stays loaded.
    // Importing foreign structures may hit assertions inside the Arrow reader on
    // malformed input: contain that as a plugin failure.
    let table = catch_unwind(AssertUnwindSafe(|| unsafe { table_ffi::import_frame(&schema, array) }))
        .map_err(|_| failure(abi::STATUS_PANIC, "the plugin's output table is malformed".into()))?
        .map_err(|error| {
            failure(
                abi::STATUS_PANIC,
                format!("the plugin's output table is unusable: {error}"),
            )
        })?;
    let result: serde_json::Value = match result_json {
        Some(text) => serde_json::from_str(&text)
            .map_err(|error| failure(abi::STATUS_PANIC, format!("the plugin's result is not JSON: {error}")))?,
        None => serde_json::json!({}),
    };
    let summary = result.get("summary").cloned().unwrap_or_else(|| serde_json::json!({}));
    let warnings = result
        .get("warnings")
        .and_then(|w| w.as_array())
        .map(|list| list.iter().filter_map(|w| w.as_str().map(str::to_owned)).collect())
        .unwrap_or_default();
    Ok(InvokeSuccess {
        table,
        summary,
        warnings,
    })
}

fn static_str(pointer: *const c_char) -> Option<&'static str> {
    if pointer.is_null() {
        return None;
    }
    // SAFETY: the ABI requires static NUL-terminated strings in the descriptor.
    unsafe { CStr::from_ptr(pointer) }.to_str().ok()
}

/// Copies a plugin-owned string and gives it back to the plugin.
fn take_plugin_string(functions: &PluginFunctions, slot: &mut *mut c_char) -> Option<String> {
    let pointer = std::mem::replace(slot, std::ptr::null_mut());
    if pointer.is_null() {
        return None;
    }
    // SAFETY: the plugin wrote a NUL-terminated string it owns; we copy it, then return it
    // through the plugin's own release function, exactly once.
    let text = unsafe { CStr::from_ptr(pointer) }.to_string_lossy().into_owned();
    unsafe { (functions.release_string)(pointer) };
    Some(text)
}

fn describe(functions: &PluginFunctions) -> Result<PluginDeclaration, String> {
    // SAFETY: `describe` takes no arguments and returns a plugin-owned string or NULL.
    let mut pointer = unsafe { (functions.describe)() };
    let text = take_plugin_string(functions, &mut pointer).ok_or("describe returned nothing")?;
    serde_json::from_str(&text).map_err(|error| format!("describe returned an unusable declaration: {error}"))
}

/// The host's progress callback.
///
/// # Safety
/// `host_data` is the [`CallControl`] pointer this host put in the context of the running
/// call; `message` is NULL or a NUL-terminated string valid for the duration of the call.
unsafe extern "C" fn report_progress(host_data: *mut c_void, fraction: f64, message: *const c_char) {
    // Never unwind into the plugin.
    let _ = catch_unwind(|| {
        // SAFETY: host_data is the CallControl passed in `invoke`, alive for the call.
        let control = unsafe { &*(host_data as *const CallControl) };
        let text = if message.is_null() {
            String::new()
        } else {
            unsafe { CStr::from_ptr(message) }.to_string_lossy().into_owned()
        };
        control.record(fraction, &text);
    });
}

/// The host's cancel check.
///
/// # Safety
/// `host_data` is the [`CallControl`] pointer this host put in the context of the running call.
unsafe extern "C" fn is_cancelled(host_data: *mut c_void) -> i32 {
    // SAFETY: as in report_progress.
    let control = unsafe { &*(host_data as *const CallControl) };
    control.cancelled.load(Ordering::Relaxed) as i32
}

/// What the system loaders' messages (glibc, macOS dyld, Windows) mean, in the order they
/// are tried: any of the lower-case words, and the meaning told to the user.
const LOADER_REASONS: &[(&[&str], &str)] = &[
    (
        &[
            "invalid elf header",
            "file too short",
            "not a mach-o",
            "not a valid win32",
        ],
        "it is not a shared library",
    ),
    (
        &["wrong elf class", "architecture", "machine"],
        "it was built for another architecture",
    ),
    (
        &["undefined symbol", "symbol not found"],
        "a symbol it needs is missing (built against other libraries or another version?)",
    ),
    (
        &["no such file", "cannot open shared object", "image not found"],
        "it, or a library it depends on, was not found",
    ),
    (&["permission denied"], "the daemon may not read it"),
];

/// Why the system loader refused a library, in words, with the loader's own reason.
/// libloading's message alone is only "dlopen failed"; the reason is its source.
pub fn load_failure(file: &Path, error: &libloading::Error) -> String {
    use std::error::Error;
    let reason = error
        .source()
        .map(|source| source.to_string())
        .unwrap_or_else(|| error.to_string());
    // The loader names the file first; the rest is its reason.
    let file_text = file.display().to_string();
    let reason = reason
        .strip_prefix(&format!("{file_text}: "))
        .unwrap_or(&reason)
        .to_owned();
    let lower = reason.to_ascii_lowercase();
    let meaning = LOADER_REASONS
        .iter()
        .find(|(words, _)| words.iter().any(|word| lower.contains(word)))
        .map_or("the system loader refused it", |(_, meaning)| meaning);
    format!("cannot load the library: {meaning} (loader: {reason})")
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A descriptor of another major version is refused from its two version fields alone:
    /// they are placed at the very end of a readable page, followed by a page that may not
    /// be read, so any read past them would end the test with SIGSEGV.
    #[cfg(unix)]
    #[test]
    fn another_major_is_refused_without_reading_past_the_versions() {
        // SAFETY: sysconf has no preconditions.
        let page = unsafe { libc::sysconf(libc::_SC_PAGESIZE) } as usize;
        // SAFETY: a fresh anonymous private mapping of two pages, unmapped below.
        let base = unsafe {
            libc::mmap(
                std::ptr::null_mut(),
                2 * page,
                libc::PROT_READ | libc::PROT_WRITE,
                libc::MAP_PRIVATE | libc::MAP_ANONYMOUS,
                -1,
                0,
            )
        };
        assert_ne!(base, libc::MAP_FAILED);
        // SAFETY: the second page lies inside the mapping.
        let guard = unsafe { base.cast::<u8>().add(page) };
        assert_eq!(unsafe { libc::mprotect(guard.cast(), page, libc::PROT_NONE) }, 0);
        // SAFETY: the last 8 bytes of the first page, writable and aligned for u32.
        let versions = unsafe { guard.sub(8) }.cast::<u32>();
        unsafe {
            versions.write(abi::ABI_MAJOR + 1);
            versions.add(1).write(7);
        }

        // SAFETY: the pointer a plugin of another major version could return.
        let error = unsafe { abi::read_descriptor(versions.cast()) }.err();
        assert_eq!(
            error,
            Some(DescriptorError::OtherMajor {
                major: abi::ABI_MAJOR + 1,
                minor: 7
            })
        );
        // SAFETY: the mapping made above, no longer used.
        assert_eq!(unsafe { libc::munmap(base, 2 * page) }, 0);
    }

    #[test]
    fn a_refused_library_says_why() {
        let directory = tempfile::tempdir().unwrap();
        let fake = directory.path().join(format!(
            "{}fake{}",
            std::env::consts::DLL_PREFIX,
            std::env::consts::DLL_SUFFIX
        ));
        std::fs::write(&fake, "this is text, not a library\n").unwrap();
        // SAFETY: the file is not a library; the loader refuses it before running anything.
        let error = unsafe { libloading::Library::new(&fake) }.unwrap_err();
        let message = load_failure(&fake, &error);
        assert!(!message.contains("dlopen failed"), "{message}");
        if cfg!(target_os = "linux") {
            assert!(
                message.starts_with("cannot load the library: it is not a shared library (loader: "),
                "{message}"
            );
        }
        let missing = directory.path().join("libmissing.so");
        // SAFETY: no file, nothing to run.
        let error = unsafe { libloading::Library::new(&missing) }.unwrap_err();
        let message = load_failure(&missing, &error);
        assert!(message.contains("was not found"), "{message}");
    }
}
