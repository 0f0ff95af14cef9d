//! The messages between the daemon and a plugin worker process, over the worker's stdin and
//! stdout.
//!
//! Every frame is a one-byte tag, a little-endian u64 length and that many bytes. A JSON
//! frame (`J`) carries a [`ToWorker`] or [`FromWorker`] message; the tables a message
//! announces follow it as table frames (`T`), each one Arrow IPC file (the format of
//! <https://arrow.apache.org/docs/format/Columnar.html#ipc-file-format>), written and read
//! by polars. Lengths are bounded so that a corrupt stream fails instead of allocating
//! without end.

use polars::prelude::{DataFrame, IpcReader, IpcWriter, SerReader, SerWriter};
use serde::{Deserialize, Serialize};
use std::io::{Cursor, Read, Write};

const TAG_JSON: u8 = b'J';
const TAG_TABLE: u8 = b'T';
/// A JSON message above this size is a broken stream, not a message.
const MAX_JSON_BYTES: u64 = 64 << 20;
/// A table above this size is refused: 16 GiB is past any table this daemon keeps.
const MAX_TABLE_BYTES: u64 = 16 << 30;

/// From the daemon to a worker.
#[derive(Debug, Serialize, Deserialize)]
#[serde(tag = "type", rename_all = "snake_case")]
pub enum ToWorker {
    /// Call an analysis; one table frame per role follows.
    Invoke {
        analysis: String,
        params: serde_json::Value,
        roles: Vec<String>,
    },
    /// The running call's client gave up: the plugin's cancel check turns true.
    Cancel,
}

/// From a worker to the daemon.
#[derive(Debug, Serialize, Deserialize)]
#[serde(tag = "type", rename_all = "snake_case")]
pub enum FromWorker {
    /// The library loaded: its descriptor fields and its `describe` text.
    Ready {
        name: String,
        version: String,
        abi_minor: u32,
        declaration: String,
    },
    /// The library was refused in the worker, with the same reasons the daemon would give.
    Refused { reason: String },
    /// Progress of the running call (fraction of the plugin's own invocation).
    Progress { fraction: f64, message: String },
    /// The call succeeded; one table frame follows.
    Done {
        summary: serde_json::Value,
        warnings: Vec<String>,
    },
    /// The call failed with an ABI status and message.
    Failed { status: i32, message: String },
}

/// Writes one JSON frame.
pub fn write_message(out: &mut impl Write, message: &impl Serialize) -> std::io::Result<()> {
    let bytes = serde_json::to_vec(message).map_err(std::io::Error::other)?;
    write_frame(out, TAG_JSON, &bytes)
}

/// Writes one table frame.
pub fn write_table(out: &mut impl Write, frame: &DataFrame) -> std::io::Result<()> {
    let mut bytes = Vec::new();
    let mut frame = frame.clone();
    IpcWriter::new(&mut bytes)
        .finish(&mut frame)
        .map_err(|error| std::io::Error::other(format!("cannot encode a table as Arrow IPC: {error}")))?;
    write_frame(out, TAG_TABLE, &bytes)
}

fn write_frame(out: &mut impl Write, tag: u8, bytes: &[u8]) -> std::io::Result<()> {
    let mut head = [0u8; 9];
    head[0] = tag;
    head[1..].copy_from_slice(&(bytes.len() as u64).to_le_bytes());
    out.write_all(&head)?;
    out.write_all(bytes)?;
    out.flush()
}

/// One frame as read.
pub enum Frame {
    Json(Vec<u8>),
    Table(Vec<u8>),
}

/// Reads one frame; `Ok(None)` at a clean end of stream (before a frame begins).
pub fn read_frame(input: &mut impl Read) -> std::io::Result<Option<Frame>> {
    let mut head = [0u8; 9];
    let mut filled = 0;
    while filled < head.len() {
        match input.read(&mut head[filled..])? {
            0 if filled == 0 => return Ok(None),
            0 => return Err(std::io::ErrorKind::UnexpectedEof.into()),
            count => filled += count,
        }
    }
    let length = u64::from_le_bytes(head[1..].try_into().expect("eight bytes"));
    let limit = match head[0] {
        TAG_JSON => MAX_JSON_BYTES,
        TAG_TABLE => MAX_TABLE_BYTES,
        other => return Err(std::io::Error::other(format!("unknown frame tag {other:#04x}"))),
    };
    if length > limit {
        return Err(std::io::Error::other(format!(
            "a frame of {length} bytes is past the limit"
        )));
    }
    let mut bytes = vec![0u8; length as usize];
    input.read_exact(&mut bytes)?;
    Ok(Some(if head[0] == TAG_JSON {
        Frame::Json(bytes)
    } else {
        Frame::Table(bytes)
    }))
}

/// Decodes a table frame.
pub fn decode_table(bytes: Vec<u8>) -> Result<DataFrame, String> {
    IpcReader::new(Cursor::new(bytes))
        .finish()
        .map_err(|error| format!("cannot decode an Arrow IPC table: {error}"))
}

/// Decodes a JSON frame as a message.
pub fn decode_message<T: for<'de> Deserialize<'de>>(bytes: &[u8]) -> Result<T, String> {
    serde_json::from_slice(bytes).map_err(|error| format!("unreadable message: {error}"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use polars::prelude::{Column, DataFrame};

    #[test]
    fn messages_and_tables_survive_the_round_trip() {
        let table = DataFrame::new(
            2,
            vec![
                Column::new("x".into(), [1.0f64, 2.5]),
                Column::new("name".into(), ["a", "b"]),
            ],
        )
        .unwrap();
        let mut stream = Vec::new();
        write_message(
            &mut stream,
            &ToWorker::Invoke {
                analysis: "a.b".into(),
                params: serde_json::json!({"k": 1}),
                roles: vec!["values".into()],
            },
        )
        .unwrap();
        write_table(&mut stream, &table).unwrap();
        let mut reader = Cursor::new(stream);
        let Some(Frame::Json(bytes)) = read_frame(&mut reader).unwrap() else {
            panic!("a JSON frame first")
        };
        let message: ToWorker = decode_message(&bytes).unwrap();
        assert!(matches!(message, ToWorker::Invoke { ref roles, .. } if roles == &["values"]));
        let Some(Frame::Table(bytes)) = read_frame(&mut reader).unwrap() else {
            panic!("a table frame second")
        };
        assert!(decode_table(bytes).unwrap().equals(&table));
        assert!(read_frame(&mut reader).unwrap().is_none());
    }

    #[test]
    fn a_cut_or_corrupt_stream_is_an_error() {
        let mut stream = Vec::new();
        write_message(&mut stream, &ToWorker::Cancel).unwrap();
        stream.truncate(stream.len() - 1);
        assert!(read_frame(&mut Cursor::new(&stream)).is_err());
        let mut huge = vec![TAG_JSON];
        huge.extend_from_slice(&u64::MAX.to_le_bytes());
        assert!(read_frame(&mut Cursor::new(huge)).is_err());
        assert!(read_frame(&mut Cursor::new(vec![b'?'; 9])).is_err());
    }
}
