//! mobilis-sdk: the plugin contract of mobilis, as one crate for the daemon and every plugin.
//!
//! - [`figure_spec`]: the figures an analysis declares for its output table.
//! - [`abi`]: the C ABI between the daemon and plugin libraries (mirrored by
//!   `include/mobilis_plugin.h`).
//! - [`table_ffi`]: DataFrames across the Arrow C Data Interface.
//! - [`param_schema`]: the JSON Schema subset parameters are declared in, and the validator
//!   the host (and [`sdk::run_typed`]) checks every call's parameters with.
//! - [`sdk`]: the Rust SDK for plugin authors (typed analyses and the `export_plugin!` macro).
//! - [`sweep_table`]: the `sweep` input role of plugins and its conversion into sweep points.
//! - [`choices`]: parameter choices several plugins share (the carrier kind).
//!
//! What this crate does not know:
//! - JSON-RPC and the daemon's workspace: a plugin sees inputs, parameters and a host
//!   context, never a request, so the same library runs in process and isolated.
//! - The numerics and the physics beyond the sweep points its tables become: those are their
//!   own crates (`mobilis-numerics`, `mobilis-physics`), not re-exported here, so that each
//!   contract has one path and a plugin depends on the crates it uses.
//! - I/O: no files, no sockets, no printing.

pub mod abi;
pub mod choices;
pub mod figure_spec;
pub mod param_schema;
pub mod sdk;
pub mod sweep_table;
pub mod table_ffi;
