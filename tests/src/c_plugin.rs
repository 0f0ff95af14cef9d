//! The C test plugin (`tests/c-plugin/cfixture.c`), compiled with the system C compiler.
//!
//! The compiler and its flags come from the `cc` crate, which normally makes static
//! archives for build scripts, so the shared object is linked by running that compiler
//! directly with `-shared`. Each set of preprocessor definitions is compiled once per test
//! process (into `target/debug/c-fixture`) and then copied under the file name a test asks
//! for: the pairs of tests that run a plugin in process and isolated, and the several tests
//! that want the plain plugin, share one compilation (about a second each).

use crate::{build_directory, workspace_root};
use std::collections::HashMap;
use std::hash::{Hash, Hasher};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::{Arc, Mutex, OnceLock};

/// Preprocessor definitions for `cfixture.c`: `(name, value)`, `None` for a bare `-DNAME`.
pub type Defines<'a> = &'a [(&'a str, Option<&'a str>)];

/// The file name of a shared library on this platform (`libNAME.so` on Linux).
pub fn shared_library_name(name: &str) -> String {
    format!("{}{name}{}", std::env::consts::DLL_PREFIX, std::env::consts::DLL_SUFFIX)
}

/// Compiles `cfixture.c` with `defines` (once per process for each set) and puts the
/// library at `dir/libNAME.so`; returns that path.
///
/// The library is a copy, not a link: the dynamic loader recognises an object already
/// loaded by its file's identity, so two links to one compilation loaded by one host would
/// be one library, where a test means two plugins.
pub fn build_c_plugin(dir: &Path, name: &str, defines: Defines) -> PathBuf {
    let compiled = compiled(defines);
    let library = dir.join(shared_library_name(name));
    std::fs::copy(&compiled, &library)
        .unwrap_or_else(|error| panic!("cannot copy {} to {}: {error}", compiled.display(), library.display()));
    library
}

/// The compiled library for `defines`, compiling it on first use in this process.
/// Concurrent tests asking for the same definitions wait for one compilation; different ones
/// compile in parallel.
fn compiled(defines: Defines) -> PathBuf {
    static CACHE: OnceLock<Mutex<HashMap<String, Arc<OnceLock<PathBuf>>>>> = OnceLock::new();
    let key: Vec<String> = defines
        .iter()
        .map(|(name, value)| match value {
            Some(value) => format!("{name}={value}"),
            None => (*name).to_owned(),
        })
        .collect();
    let key = key.join(" ");
    let slot = CACHE
        .get_or_init(Default::default)
        .lock()
        .unwrap_or_else(|poisoned| poisoned.into_inner())
        .entry(key.clone())
        .or_default()
        .clone();
    slot.get_or_init(|| compile(&key, defines)).clone()
}

/// Runs the C compiler on `cfixture.c` with `defines`, into the build directory under a name
/// made from `key`. The compiler writes a file of this process's own and renames it into
/// place, so that test processes running at once never see half a library.
fn compile(key: &str, defines: Defines) -> PathBuf {
    let dir = build_directory().join("c-fixture");
    std::fs::create_dir_all(&dir).unwrap_or_else(|error| panic!("cannot create {}: {error}", dir.display()));
    let mut hasher = std::collections::hash_map::DefaultHasher::new();
    key.hash(&mut hasher);
    let stem = format!("cfixture-{:016x}", hasher.finish());
    let library = dir.join(shared_library_name(&stem));
    let partial = dir.join(format!("{stem}.{}.partial", std::process::id()));
    let source = workspace_root().join("tests/c-plugin/cfixture.c");
    let mut build = cc::Build::new();
    build
        .include(workspace_root().join("core/sdk/include"))
        .std("c99")
        // The plugin is meant as an example of clean C: any warning fails the test.
        .warnings(true)
        .extra_warnings(true)
        .warnings_into_errors(true)
        .pic(true)
        .opt_level(0)
        .debug(false)
        .target(host_triple())
        .host(host_triple())
        .out_dir(&dir)
        // Not a build script: cargo must not read our output as instructions.
        .cargo_metadata(false);
    for (key, value) in defines {
        build.define(key, *value);
    }
    let compiler = build.get_compiler();
    let output = compiler
        .to_command()
        .args(["-shared", "-fPIC", "-o"])
        .arg(&partial)
        .arg(&source)
        .output()
        .unwrap_or_else(|error| panic!("cannot run the C compiler {}: {error}", compiler.path().display()));
    assert!(
        output.status.success(),
        "compiling {} with {defines:?} failed:\n{}{}",
        source.display(),
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
    std::fs::rename(&partial, &library)
        .unwrap_or_else(|error| panic!("cannot move {} to {}: {error}", partial.display(), library.display()));
    library
}

/// The Rust target triple of this machine, which `cc` needs outside a build script (where
/// cargo would tell it). Tests run on the machine they were built for, so the host's
/// triple is the target's.
fn host_triple() -> &'static str {
    static TRIPLE: OnceLock<String> = OnceLock::new();
    TRIPLE.get_or_init(|| {
        let rustc = std::env::var("RUSTC").unwrap_or_else(|_| "rustc".into());
        let output = Command::new(&rustc)
            .arg("-vV")
            .output()
            .unwrap_or_else(|error| panic!("cannot run `{rustc} -vV` to learn the target triple: {error}"));
        let text = String::from_utf8_lossy(&output.stdout);
        text.lines()
            .find_map(|line| line.strip_prefix("host: "))
            .unwrap_or_else(|| panic!("`{rustc} -vV` printed no host line:\n{text}"))
            .trim()
            .to_owned()
    })
}
