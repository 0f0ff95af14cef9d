//! The size and connection limits of the transports, one place for all three (HTTP,
//! WebSocket, stdio) and for the dispatcher that checks answers against them.

/// Largest request body the HTTP transport accepts (inline imports are the large ones).
pub const MAX_REQUEST_BYTES: u32 = 64 * 1024 * 1024;
/// Largest response body (a page of `dataset.rows`).
pub const MAX_RESPONSE_BYTES: u32 = 256 * 1024 * 1024;
/// Simultaneous connections.
pub const MAX_CONNECTIONS: u32 = 64;
/// Largest stdio frame.
pub const MAX_STDIO_FRAME_BYTES: usize = 64 * 1024 * 1024;
