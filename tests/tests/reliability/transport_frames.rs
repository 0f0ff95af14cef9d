//! Malformed JSON-RPC and stdio frames, and every id the JSON-RPC specification allows.
