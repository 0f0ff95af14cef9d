//! Who may call over HTTP and WebSocket: allowed origins, the bearer token, the CORS
//! preflight, and the short self-description a plain visit of `/` gets.

use bytes::Bytes;
use http_body_util::Full;
use sha2::{Digest, Sha256};

/// The body every answer of the web transport carries.
pub(super) type Body = Full<Bytes>;

/// Who may call over HTTP and WebSocket.
#[derive(Debug, Clone, Default)]
pub struct AccessPolicy {
    pub allowed_origins: Vec<String>,
    pub token: Option<String>,
}

/// What the access layer decided about a request.
pub(super) enum Verdict {
    Pass,
    /// A browser's CORS preflight from an allowed origin: answered here, before the token
    /// check, because browsers never send credentials with a preflight.
    Preflight(String),
    Refuse(u16, String),
}

/// Refuses a token nobody could present: an empty or blank `--token` would start a daemon
/// that answers every request with 401, which is a misconfiguration, not a protection.
pub fn check_token_setting(token: &str) -> Result<(), String> {
    if token.trim().is_empty() {
        return Err(
            "the token is empty or blank; set MOBILIS_TOKEN to a long random string (for example `openssl rand -hex 32`)"
                .into(),
        );
    }
    Ok(())
}

/// Compares a presented token with the expected one in time that does not depend on where
/// they differ. Both are hashed first, so the comparison runs over two 32-byte digests
/// whatever the lengths, and the folded difference is read once at the end.
fn same_token(presented: &str, expected: &str) -> bool {
    let presented = Sha256::digest(presented.as_bytes());
    let expected = Sha256::digest(expected.as_bytes());
    let difference = presented
        .iter()
        .zip(expected.iter())
        .fold(0u8, |difference, (a, b)| difference | (a ^ b));
    // black_box keeps the optimiser from turning the fold into an early-exit comparison.
    std::hint::black_box(difference) == 0
}

/// The credentials of an `Authorization` header value: the authentication scheme is
/// case-insensitive (RFC 9110, section 11.1; RFC 6750, section 2.1 for `Bearer`).
fn bearer_credentials(value: &str) -> Option<&str> {
    let (scheme, credentials) = value.trim().split_once(' ')?;
    scheme.eq_ignore_ascii_case("bearer").then(|| credentials.trim())
}

impl AccessPolicy {
    /// The request's Origin header, if it has one.
    pub(super) fn origin<B>(request: &http::Request<B>) -> Option<String> {
        request
            .headers()
            .get("origin")
            .map(|origin| origin.to_str().unwrap_or("").to_owned())
    }

    pub(super) fn judge<B>(&self, request: &http::Request<B>) -> Verdict {
        if let Some(origin) = Self::origin(request) {
            if !self
                .allowed_origins
                .iter()
                .any(|allowed| *allowed == origin || allowed == "*")
            {
                return Verdict::Refuse(
                    403,
                    format!("requests from origin {origin} are not allowed; start mobilisd with --allow-origin {origin} to allow this page"),
                );
            }
            if request.method() == http::Method::OPTIONS {
                return Verdict::Preflight(origin);
            }
        }
        match self.check_token(request) {
            Some((status, message)) => Verdict::Refuse(status, message),
            None => Verdict::Pass,
        }
    }

    /// `None` when the request carries the token (or none is required), else the refusal.
    fn check_token<B>(&self, request: &http::Request<B>) -> Option<(u16, String)> {
        let token = self.token.as_deref()?;
        let presented = request
            .headers()
            .get("authorization")
            .and_then(|v| v.to_str().ok())
            .and_then(bearer_credentials);
        match presented {
            Some(presented) if same_token(presented, token) => None,
            _ => Some((
                401,
                "this daemon requires the header `Authorization: Bearer <token>`".into(),
            )),
        }
    }
}

/// A JSON answer with the given status.
pub(super) fn json_response(status: u16, body: String) -> http::Response<Body> {
    http::Response::builder()
        .status(status)
        .header("content-type", "application/json")
        .body(Full::new(Bytes::from(body)))
        .expect("static response parts are valid")
}

/// An HTTP-level refusal, worded as a JSON-RPC error so that clients show the message.
pub(super) fn refusal(status: u16, message: &str) -> http::Response<Body> {
    tracing::warn!(status, %message, "request refused");
    let body = serde_json::json!({
        "jsonrpc": "2.0",
        "id": null,
        "error": {"code": -32600, "message": message}
    })
    .to_string();
    json_response(status, body)
}

/// The answer to an allowed origin's CORS preflight.
pub(super) fn preflight(origin: &str) -> http::Response<Body> {
    http::Response::builder()
        .status(204)
        .header("access-control-allow-origin", origin)
        .header("access-control-allow-methods", "POST, OPTIONS")
        .header("access-control-allow-headers", "content-type, authorization")
        .header("access-control-max-age", "600")
        .header("vary", "Origin")
        .body(Full::new(Bytes::new()))
        .unwrap_or_else(|_| refusal(400, "the Origin header is not a valid header value"))
}

/// Names an allowed page's origin on an answer so that the page may read it (CORS).
pub(super) fn allow_origin<B>(response: &mut http::Response<B>, origin: Option<&str>) {
    if let Some(origin) = origin.and_then(|o| http::HeaderValue::from_str(o).ok()) {
        let headers = response.headers_mut();
        headers.insert("access-control-allow-origin", origin);
        headers.insert("vary", http::HeaderValue::from_static("Origin"));
    }
}

/// A GET of `/` that is not a WebSocket upgrade: a person (or a script) asking what answers
/// on this port. JSON-RPC itself arrives by POST or over the WebSocket.
pub(super) fn is_plain_visit<B>(request: &http::Request<B>) -> bool {
    request.method() == http::Method::GET
        && request.uri().path() == "/"
        && !request.headers().contains_key(http::header::UPGRADE)
}

/// What this port is and where its documentation is, as a short JSON document.
pub(super) fn self_description() -> http::Response<Body> {
    let body = serde_json::json!({
        "name": "mobilisd",
        "version": env!("CARGO_PKG_VERSION"),
        "what": "the mobilis analysis server for resistivity, Hall-effect, multi-carrier and magnetoresistance measurements",
        "protocol": "JSON-RPC 2.0: POST a request to this address, or open a WebSocket here",
        "discover": "call rpc.discover for the OpenRPC document of every method and analysis.list for the analyses",
        "docs": "README.md (using it), the rpc.discover method (every method and its parameters) and DEVELOPERS.md (architecture, plugins) in the mobilis source tree"
    })
    .to_string();
    json_response(200, body)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn request_with(authorization: Option<&str>) -> http::Request<()> {
        let mut builder = http::Request::builder().method("POST").uri("/");
        if let Some(value) = authorization {
            builder = builder.header("authorization", value);
        }
        builder.body(()).unwrap()
    }

    #[test]
    fn the_token_is_checked_whatever_its_length_or_scheme_case() {
        let policy = AccessPolicy {
            allowed_origins: vec![],
            token: Some("s3cret-token".into()),
        };
        let passes = |value: Option<&str>| matches!(policy.judge(&request_with(value)), Verdict::Pass);
        assert!(passes(Some("Bearer s3cret-token")));
        assert!(passes(Some("bearer s3cret-token")));
        assert!(!passes(Some("Bearer s3cret-toke")));
        assert!(!passes(Some("Bearer s3cret-token2")));
        assert!(!passes(Some("Bearer ")));
        assert!(!passes(Some("Basic s3cret-token")));
        assert!(!passes(None));
    }

    #[test]
    fn blank_tokens_are_refused_at_start() {
        assert!(check_token_setting("").is_err());
        assert!(check_token_setting("  \t").is_err());
        assert!(check_token_setting("x").is_ok());
    }

    #[test]
    fn tokens_compare_equal_only_when_equal() {
        assert!(same_token("abc", "abc"));
        assert!(!same_token("abc", "abd"));
        assert!(!same_token("", "abc"));
        assert!(!same_token("abc", ""));
    }
}
