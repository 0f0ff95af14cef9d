//! mobilisd: the analysis daemon. It holds datasets (polars in memory, Parquet on disk),
//! hosts plugin libraries, and serves both over JSON-RPC.
//!
//! Data flow of a request: `transport` (HTTP, WebSocket or stdio) -> `methods` (parameter
//! parsing, error codes) -> `service` (the daemon's logic) -> `store` / `plugin_host`
//! (across the C ABI into a plugin) -> `store` -> back to the client.

pub mod bounded_calls;
pub mod compute_slots;
pub mod csv_dialect;
pub mod customary;
pub mod data_roots;
pub mod errors;
pub mod library_check;
pub mod methods;
pub mod openrpc;
pub mod plots;
pub mod plugin_call;
pub mod plugin_host;
pub mod plugin_supervisor;
pub mod plugin_worker;
pub mod progress;
pub mod report;
pub mod rows_json;
pub mod service;
pub mod store;
pub mod suggest;
pub mod tables;
pub mod transport;
pub mod worker_protocol;
pub mod workspace_lock;
