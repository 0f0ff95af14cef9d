//! The integration tests, as one test binary: each module was its own binary once, and each
//! linked the whole daemon, so a change in `tests/src` relinked seventeen of them. One binary
//! links once, and its tests share one process: the daemon and plugins are built once
//! (`mobilis_tests::ensure_built`), and tests run in parallel threads.
//!
//! Because the tests share a process, none may change what the others see: no
//! `std::env::set_var` (pass variables to child processes with `Command::env`), no
//! `set_current_dir`, no fixed ports (daemons listen on `127.0.0.1:0`), and every test
//! writes into its own temporary directory. `test_layout` checks that every file here is a
//! module of this binary.
//!
//! Run one module with a filter: `cargo test -p mobilis-tests --test suite end_to_end::`.
//! `MOBILIS_SLOW_TESTS=1` runs the slow checks with their full round counts.

mod browser_client;
mod carriers_chain;
mod cli;
mod data_safety;
mod end_to_end;
mod figure_errors;
mod import_dialects;
mod js_client;
mod lab_plugin;
mod magnetoresistance;
mod notebooks;
mod plugin_abi;
mod reliability;
mod repeated_sweeps;
mod report;
mod rpc_messages;
mod spectrum_analyses;
mod stdio_editor;
mod test_command;
mod test_layout;
mod tidy;
