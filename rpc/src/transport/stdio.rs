//! JSON-RPC over stdin and stdout with `Content-Length` framing, as language servers use:
//! each message is `Content-Length: N\r\n\r\n` followed by N bytes of JSON.
//!
//! The reader holds at most one header line of [`MAX_HEADER_LINE`] bytes: a longer line is
//! discarded as it arrives, never buffered whole. Whatever bytes a header holds, a frame that
//! cannot be read is answered with a Parse error (-32700) and the reader goes on. When a
//! frame has no usable length (missing, not a number, over the limit) the bytes after it
//! cannot be told apart from a body, so the reader skips to the next line that holds a
//! `Content-Length:` header and starts again there.

use super::limits::MAX_STDIO_FRAME_BYTES;
use super::messages::{parse_error, Dispatcher, Session, Via};
use jsonrpsee::RpcModule;
use tokio::io::{AsyncBufRead, AsyncBufReadExt, AsyncReadExt, AsyncWrite, AsyncWriteExt, BufReader};
use tokio::sync::mpsc;

/// Longest header line read; longer ones are skipped as they arrive.
pub(super) const MAX_HEADER_LINE: usize = 8 * 1024;
/// Most header lines in one frame.
pub(super) const MAX_HEADER_LINES: usize = 32;

/// One line of input, without its line feed.
#[derive(Debug, PartialEq)]
enum Line {
    Text,
    /// Longer than [`MAX_HEADER_LINE`]; its bytes were discarded.
    TooLong,
    /// The input ended; `partial` when some bytes of an unfinished line came first.
    End {
        partial: bool,
    },
}

/// Reads one line into `line` (cleared first), holding at most [`MAX_HEADER_LINE`] bytes.
async fn read_line(input: &mut (impl AsyncBufRead + Unpin), line: &mut Vec<u8>) -> std::io::Result<Line> {
    line.clear();
    let mut too_long = false;
    let mut seen = false;
    loop {
        let available = input.fill_buf().await?;
        if available.is_empty() {
            return Ok(Line::End { partial: seen });
        }
        seen = true;
        let (taken, complete) = match available.iter().position(|&b| b == b'\n') {
            Some(end) => (end + 1, true),
            None => (available.len(), false),
        };
        let content = &available[..if complete { taken - 1 } else { taken }];
        if !too_long && line.len() + content.len() <= MAX_HEADER_LINE {
            line.extend_from_slice(content);
        } else {
            too_long = true;
            line.clear();
        }
        input.consume(taken);
        if complete {
            return Ok(if too_long { Line::TooLong } else { Line::Text });
        }
    }
}

/// Where `needle` (lower-case ASCII) starts in `haystack`, ignoring ASCII case.
fn find_ignoring_case(haystack: &[u8], needle: &[u8]) -> Option<usize> {
    haystack
        .windows(needle.len())
        .position(|window| window.eq_ignore_ascii_case(needle))
}

/// What the reader found next.
#[derive(Debug, PartialEq)]
pub(super) enum Frame {
    Body(Vec<u8>),
    /// A frame that could not be read; the text says why.
    Refused(String),
    /// The input ended; `mid_frame` when it ended inside a frame.
    End {
        mid_frame: bool,
    },
}

/// Reads `Content-Length` frames with bounded buffers, resynchronizing after bad ones.
pub(super) struct FrameReader<R> {
    input: R,
    line: Vec<u8>,
    /// After a frame without a usable length: skip to the next `Content-Length:` line.
    resyncing: bool,
}

impl<R: AsyncBufRead + Unpin> FrameReader<R> {
    pub(super) fn new(input: R) -> Self {
        FrameReader {
            input,
            line: Vec::with_capacity(256),
            resyncing: false,
        }
    }

    /// A frame whose first line is no header cannot say where it ends: it is refused at once
    /// and the reader looks for the next `Content-Length:` line, which may follow directly
    /// (the good frame after a stray line is not swallowed).
    fn refuse_start_with(&mut self, why: String) -> Frame {
        self.resyncing = true;
        Frame::Refused(format!("parse error: {why}"))
    }

    pub(super) async fn next(&mut self) -> std::io::Result<Frame> {
        let mut length: Option<Result<usize, String>> = None;
        let mut problem: Option<String> = None;
        let mut lines = 0usize;
        loop {
            match read_line(&mut self.input, &mut self.line).await? {
                Line::End { partial } => {
                    return Ok(Frame::End {
                        mid_frame: (partial || lines > 0) && !self.resyncing,
                    })
                }
                Line::TooLong => {
                    if !self.resyncing {
                        lines += 1;
                        if lines == 1 {
                            return Ok(self.refuse_start_with(format!(
                                "a header line is longer than {MAX_HEADER_LINE} bytes; headers are short `Name: value` lines"
                            )));
                        }
                        problem.get_or_insert(format!(
                            "a header line is longer than {MAX_HEADER_LINE} bytes; headers are short `Name: value` lines"
                        ));
                    }
                    continue;
                }
                Line::Text => {}
            }
            let mut text: &[u8] = self.line.strip_suffix(b"\r").unwrap_or(&self.line);
            if self.resyncing {
                match find_ignoring_case(text, b"content-length:") {
                    Some(start) => {
                        self.resyncing = false;
                        text = &text[start..];
                    }
                    None => continue,
                }
            }
            if lines == 0 {
                // The tail of a body shorter than its frame said runs into the next header:
                // the frame starts at that header.
                if let Some(start) = find_ignoring_case(text, b"content-length:").filter(|&start| start > 0) {
                    text = &text[start..];
                }
            }
            if text.is_empty() {
                if lines == 0 {
                    // Blank lines between frames are tolerated.
                    continue;
                }
                break;
            }
            lines += 1;
            if lines > MAX_HEADER_LINES {
                problem.get_or_insert(format!("a frame has more than {MAX_HEADER_LINES} header lines"));
                continue;
            }
            let Ok(header) = std::str::from_utf8(text) else {
                let at = text.iter().position(|b| !b.is_ascii()).unwrap_or(0);
                let why = format!(
                    "header line {lines} is not text (byte 0x{:02x} at column {}); headers are ASCII `Name: value` lines",
                    text[at],
                    at + 1
                );
                if lines == 1 {
                    return Ok(self.refuse_start_with(why));
                }
                problem.get_or_insert(why);
                continue;
            };
            let Some((name, value)) = header.split_once(':') else {
                let why = format!(
                    "header line {lines} is not a `Name: value` header; a frame is `Content-Length: N`, an empty line and N bytes of JSON"
                );
                if lines == 1 {
                    return Ok(self.refuse_start_with(why));
                }
                problem.get_or_insert(why);
                continue;
            };
            if name.trim().eq_ignore_ascii_case("content-length") {
                let value = value.trim();
                length = Some(match value.parse::<usize>() {
                    Ok(n) if n <= MAX_STDIO_FRAME_BYTES => Ok(n),
                    Ok(n) => Err(format!(
                        "Content-Length {n} is over the limit of {MAX_STDIO_FRAME_BYTES} bytes; send smaller messages (import large files by path)"
                    )),
                    Err(_) => Err(format!(
                        "Content-Length `{}` is not a number of bytes",
                        value.chars().take(40).collect::<String>()
                    )),
                });
            }
        }
        let length = match length {
            None => Err(
                "missing Content-Length header: a frame is `Content-Length: N`, an empty line and N bytes of JSON"
                    .to_owned(),
            ),
            Some(length) => length,
        };
        match (length, problem) {
            (Err(reason), _) => {
                // The body's extent is unknown: find the next frame by its header.
                self.resyncing = true;
                Ok(Frame::Refused(format!("parse error: {reason}")))
            }
            (Ok(length), Some(problem)) => {
                // The length is known: skip the body and stay in step.
                let skipped =
                    tokio::io::copy(&mut (&mut self.input).take(length as u64), &mut tokio::io::sink()).await?;
                if skipped < length as u64 {
                    return Ok(Frame::End { mid_frame: true });
                }
                Ok(Frame::Refused(format!("parse error: {problem}")))
            }
            (Ok(length), None) => {
                let mut body = vec![0u8; length];
                match self.input.read_exact(&mut body).await {
                    Ok(_) => Ok(Frame::Body(body)),
                    Err(error) if error.kind() == std::io::ErrorKind::UnexpectedEof => {
                        Ok(Frame::End { mid_frame: true })
                    }
                    Err(error) => Err(error),
                }
            }
        }
    }
}

async fn write_frame(output: &mut (impl AsyncWrite + Unpin), body: &str) -> std::io::Result<()> {
    output
        .write_all(format!("Content-Length: {}\r\n\r\n", body.len()).as_bytes())
        .await?;
    output.write_all(body.as_bytes()).await?;
    output.flush().await
}

/// Serves JSON-RPC over stdin and stdout until stdin closes. Batches are answered as batches.
///
/// Requests are handled concurrently, as over a WebSocket: an editor can subscribe to a
/// call's progress, start the call and cancel it while it runs. Responses and notifications
/// share stdout through one writer so that frames never interleave. When stdin closes, even
/// inside a frame, the requests in flight are answered before the daemon exits.
pub async fn serve_stdio<C: Send + Sync + 'static>(module: RpcModule<C>) -> std::io::Result<()> {
    let (output, mut outgoing) = mpsc::channel::<String>(64);
    let writer = tokio::spawn(async move {
        let mut stdout = tokio::io::stdout();
        while let Some(body) = outgoing.recv().await {
            write_frame(&mut stdout, &body).await?;
        }
        Ok::<_, std::io::Error>(())
    });
    let mut session = Session::new(Dispatcher::new(module.into()), Via::Stdio, output);
    let mut frames = FrameReader::new(BufReader::new(tokio::io::stdin()));
    loop {
        match frames.next().await {
            Ok(Frame::Body(body)) => session.start(body).await,
            Ok(Frame::Refused(reason)) => {
                tracing::warn!(%reason, "stdio frame refused");
                session.send(parse_error(&reason)).await;
            }
            Ok(Frame::End { mid_frame }) => {
                if mid_frame {
                    session
                        .send(parse_error("parse error: the input ended inside a frame"))
                        .await;
                }
                break;
            }
            Err(error) => {
                tracing::warn!(%error, "stdin cannot be read; answering the calls in flight and stopping");
                break;
            }
        }
    }
    session.finish().await;
    writer.await.map_err(std::io::Error::other)?
}

#[cfg(test)]
mod tests {
    use super::*;

    async fn frames_of(input: &[u8]) -> Vec<Frame> {
        let mut reader = FrameReader::new(BufReader::new(input));
        let mut frames = Vec::new();
        loop {
            let frame = reader.next().await.unwrap();
            let end = matches!(frame, Frame::End { .. });
            frames.push(frame);
            if end {
                return frames;
            }
        }
    }

    fn good(body: &str) -> Vec<u8> {
        format!("Content-Length: {}\r\n\r\n{body}", body.len()).into_bytes()
    }

    #[tokio::test]
    async fn every_bad_frame_is_refused_and_the_next_good_one_read() {
        let bad: Vec<Vec<u8>> = vec![
            b"Content-\xff\xfeLength: 2\r\n\r\n{}".to_vec(),
            b"X-Note: \xc3\x28\r\nContent-Length: 2\r\n\r\n{}".to_vec(),
            b"Content-Length: 99999999999999\r\n\r\n{\"jsonrpc\":\"2.0\"}\r\n".to_vec(),
            b"Content-Length: many\r\n\r\n{}\n".to_vec(),
            b"\r\n{\"no\":\"header\"}\r\n\r\n".to_vec(),
            b"Content-Length: 1\r\n\r\n{}".to_vec(),
            [
                b"X-Long: ".to_vec(),
                vec![b'a'; 100_000],
                b"\r\nContent-Length: 2\r\n\r\n{}".to_vec(),
            ]
            .concat(),
            (0..40)
                .flat_map(|i| format!("X-{i}: y\r\n").into_bytes())
                .chain(good("{}"))
                .collect(),
            b"\xfe\xfe no header here\r\n".to_vec(),
            [vec![b'z'; 3 * MAX_HEADER_LINE], b"\r\n".to_vec()].concat(),
        ];
        for input in bad {
            let mut stream = input.clone();
            stream.extend(good(r#"{"ok":1}"#));
            let frames = frames_of(&stream).await;
            assert!(
                matches!(&frames[0], Frame::Refused(_)) || matches!(&frames[0], Frame::Body(b) if b == b"{"),
                "{:?}: {frames:?}",
                String::from_utf8_lossy(&input)
            );
            assert!(
                frames.contains(&Frame::Body(br#"{"ok":1}"#.to_vec())),
                "{:?}: {frames:?}",
                String::from_utf8_lossy(&input)
            );
        }
    }

    #[tokio::test]
    async fn the_end_inside_a_frame_is_told_apart() {
        assert_eq!(frames_of(b"").await, vec![Frame::End { mid_frame: false }]);
        assert_eq!(
            frames_of(b"Content-Length: 10\r\n\r\n{\"a\"").await,
            vec![Frame::End { mid_frame: true }]
        );
        assert_eq!(frames_of(b"Content-Len").await, vec![Frame::End { mid_frame: true }]);
    }

    #[tokio::test]
    async fn a_long_line_is_not_buffered_whole() {
        let mut input = vec![b'x'; 10 * MAX_HEADER_LINE];
        input.extend(b"\nrest\n");
        let mut reader = BufReader::new(&input[..]);
        let mut line = Vec::new();
        assert_eq!(read_line(&mut reader, &mut line).await.unwrap(), Line::TooLong);
        assert!(line.capacity() <= 2 * MAX_HEADER_LINE + 8192);
        assert_eq!(read_line(&mut reader, &mut line).await.unwrap(), Line::Text);
        assert_eq!(line, b"rest");
    }
}
