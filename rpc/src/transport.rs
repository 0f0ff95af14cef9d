//! How requests reach the methods: HTTP and WebSocket on one port, or stdio with
//! `Content-Length` framing as language servers use.
//!
//! A web page must not be able to drive a local daemon: browsers attach an `Origin`
//! header to cross-site requests and to every WebSocket handshake, so requests carrying an
//! Origin that is not explicitly allowed (`--allow-origin`) are refused. Clients that are
//! not browsers (the CLI, curl, notebooks' HTTP libraries) send no Origin and pass. When
//! the daemon listens beyond loopback it requires `Authorization: Bearer <token>`.
//!
//! Pages of an allowed origin get what browsers need to read the answers (CORS): their
//! preflight is answered here, before the token check (browsers send no credentials with a
//! preflight), and every answer names the origin in `Access-Control-Allow-Origin`. Browser
//! WebSockets cannot set headers, so a page reaching a token-protected daemon uses HTTP.
//!
//! The three transports share one message handler (`messages`): it answers every id the
//! JSON-RPC 2.0 specification allows, verbatim, and batches as section 6 of the
//! specification says. A call's future belongs to its connection: when an HTTP client
//! disconnects or a WebSocket closes, the futures of its calls are dropped.
//!
//! # Limits and answers
//!
//! - A connection beyond [`MAX_CONNECTIONS`] (64) gets 503; one connection runs at most 256
//!   calls at once, and its reader waits beyond. An HTTP POST of notifications only gets 204.
//! - stdio frames are read with bounded buffers: a header line of at most 8 KiB, at most 32
//!   header lines, a body of at most [`MAX_STDIO_FRAME_BYTES`]. Any frame that cannot be read
//!   gets -32700 and the reader goes on; when stdin ends, even inside a frame, the calls in
//!   flight are answered before the daemon exits.
//! - An unknown method keeps JSON-RPC's code -32601 ([`METHOD_NOT_FOUND`]) but names the method
//!   and the closest known ones by edit distance, with `data.closest` ([`method_not_found`]),
//!   on every transport and inside batches.
//! - A plain `GET /` (not a WebSocket upgrade) that passes the origin and token checks gets a
//!   short JSON note of what answers on the port and where the documentation is.
//! - The token is compared in constant time (the SHA-256 digests of both, their difference
//!   folded and read once at the end), the `Bearer` scheme in any case (RFC 9110, section
//!   11.1). Pass it as `MOBILIS_TOKEN`: the daemon warns when it came from `--token`, which
//!   every local user can read in the process list, and refuses to start with an empty or blank
//!   one.
//!
//! The checks (`tests/tests/suite/reliability/transport_frames.rs`): every allowed and disallowed id
//! over the three transports; each bad stdio frame followed by a good request that must be
//! answered, and the specification's examples; finished work answered before the end of input;
//! a seeded fuzz of random frames over stdio and random JSON over HTTP and WebSocket (300
//! rounds, 20,000 with `MOBILIS_SLOW_TESTS=1`; the daemon must answer a final `server.info`);
//! the token. The unit tests `transport::web::tests` check with a method that counts its drops
//! that a call stops when its HTTP client or WebSocket goes.

mod access;
mod limits;
mod messages;
mod stdio;
mod web;

pub use access::{check_token_setting, AccessPolicy};
pub use limits::{MAX_CONNECTIONS, MAX_REQUEST_BYTES, MAX_RESPONSE_BYTES, MAX_STDIO_FRAME_BYTES};
pub use messages::{method_not_found, METHOD_NOT_FOUND};
pub use stdio::serve_stdio;
pub use web::{serve_http, ServerHandle};

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unknown_methods_are_named_with_the_closest_known_ones() {
        let known: Vec<String> = mobilis_protocol::METHODS.iter().map(|m| m.name.to_owned()).collect();
        let closest = |asked: &str| crate::suggest::closest_names(asked, known.iter().map(String::as_str));
        assert_eq!(closest("dataset.lst")[0], "dataset.list");
        assert_eq!(closest("datasets.list")[0], "dataset.list");
        assert_eq!(closest("import"), vec!["dataset.import"]);
        assert_eq!(closest("analysis.runn")[0], "analysis.run");
        assert!(closest("frobnicate").is_empty());
        let error = method_not_found("dataset.lst", &known);
        assert_eq!(error.code(), METHOD_NOT_FOUND);
        assert!(error
            .message()
            .starts_with("no method named `dataset.lst`; did you mean dataset.list"));
        assert_eq!(
            method_not_found("frobnicate", &known).message(),
            "no method named `frobnicate`; rpc.discover lists every method"
        );
    }
}
