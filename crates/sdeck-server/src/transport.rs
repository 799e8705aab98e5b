//! The frames between the client and tower-lsp.
//!
//! tower-lsp 0.20 ends the whole session at the first frame it cannot decode (invalid
//! JSON, a header without `Content-Length`, a JSON array, an object without
//! `"jsonrpc"`), and every open document is lost with it. So the server reads standard
//! input itself: each frame is checked here, a good one is passed on to tower-lsp with a
//! fresh header, a bad one gets its JSON-RPC error reply (parse error or invalid
//! request) and the server reads on. Replies and tower-lsp's own output go to standard
//! output whole frame by whole frame, so an error reply never cuts into another message.
//!
//! When standard input ends the client is gone: the process ends.

use crate::trace;
use serde_json::{json, Value};
use tokio::io::{AsyncRead, AsyncReadExt, AsyncWriteExt, DuplexStream};

/// The largest frame read. A longer one is skipped with an error reply: no model the
/// analysis takes is near this size, and the text is held several times while analysed.
pub const MAX_FRAME_BYTES: usize = 64 << 20;

/// A header block longer than this without its blank line is not a header.
const MAX_HEADER_BYTES: usize = 8 << 10;

const CONTENT_LENGTH: &[u8] = b"content-length:";

/// What the reader found at the front of its buffer.
#[derive(Debug, PartialEq)]
pub enum Frame {
    /// More bytes are needed.
    Incomplete,
    /// A well-formed message body, for tower-lsp.
    Message(Vec<u8>),
    /// A bad frame, consumed: the JSON-RPC error reply to send.
    Reply(Value),
}

/// Splits a byte stream into frames, recovering after a bad one.
#[derive(Default)]
pub struct Reader {
    /// Whether the bodies come from tower-lsp, which writes only well-formed messages:
    /// they are framed, not checked (a completion list is tens of kilobytes of JSON).
    trusted: bool,
    buffer: Vec<u8>,
    /// Bytes of a too-long body still to skip.
    skip: usize,
    /// After a header without `Content-Length`: drop bytes up to the next one.
    resync: bool,
}

impl Reader {
    /// A reader of tower-lsp's own output: frames only.
    fn trusted() -> Reader {
        Reader {
            trusted: true,
            ..Reader::default()
        }
    }

    pub fn push(&mut self, bytes: &[u8]) {
        if self.skip > 0 {
            let dropped = self.skip.min(bytes.len());
            self.skip -= dropped;
            self.buffer.extend_from_slice(&bytes[dropped..]);
        } else {
            self.buffer.extend_from_slice(bytes);
        }
    }

    /// The next frame of the buffer, if complete.
    pub fn next_frame(&mut self) -> Frame {
        if self.resync {
            match find_ignoring_case(&self.buffer, CONTENT_LENGTH) {
                Some(at) => {
                    self.buffer.drain(..at);
                    self.resync = false;
                }
                None => {
                    // Keep a tail that may be the start of the header name.
                    let keep = CONTENT_LENGTH.len().min(self.buffer.len());
                    self.buffer.drain(..self.buffer.len() - keep);
                    return Frame::Incomplete;
                }
            }
        }
        // Blank lines between frames are tolerated.
        let blank = self
            .buffer
            .iter()
            .take_while(|b| b.is_ascii_whitespace())
            .count();
        self.buffer.drain(..blank);
        let Some(end) = find(&self.buffer, b"\r\n\r\n") else {
            if self.buffer.len() > MAX_HEADER_BYTES {
                self.buffer.clear();
                self.resync = true;
                return Frame::Reply(error(
                    Value::Null,
                    -32700,
                    "a message header longer than 8 KiB without its blank line; \
                     each message starts with `Content-Length: N` and an empty line",
                ));
            }
            return Frame::Incomplete;
        };
        let length = content_length(&self.buffer[..end]);
        let body_start = end + 4;
        let length = match length {
            Ok(n) => n,
            Err(why) => {
                self.buffer.drain(..body_start);
                self.resync = true;
                return Frame::Reply(error(Value::Null, -32700, &why));
            }
        };
        if length > MAX_FRAME_BYTES {
            let available = self.buffer.len() - body_start;
            let dropped = length.min(available);
            self.buffer.drain(..body_start + dropped);
            self.skip = length - dropped;
            return Frame::Reply(error(
                Value::Null,
                -32700,
                &format!(
                    "a message of {length} bytes, more than the {MAX_FRAME_BYTES} the server \
                     reads; it was skipped"
                ),
            ));
        }
        if self.buffer.len() < body_start + length {
            return Frame::Incomplete;
        }
        let body: Vec<u8> = self
            .buffer
            .drain(..body_start + length)
            .skip(body_start)
            .collect();
        if self.trusted {
            return Frame::Message(body);
        }
        match check_message(&body) {
            Ok(()) => Frame::Message(body),
            Err(reply) => Frame::Reply(reply),
        }
    }
}

fn find(haystack: &[u8], needle: &[u8]) -> Option<usize> {
    haystack.windows(needle.len()).position(|w| w == needle)
}

fn find_ignoring_case(haystack: &[u8], needle: &[u8]) -> Option<usize> {
    haystack
        .windows(needle.len())
        .position(|w| w.eq_ignore_ascii_case(needle))
}

/// The `Content-Length` of a header block, or what is wrong with it.
fn content_length(header: &[u8]) -> Result<usize, String> {
    let text = String::from_utf8_lossy(header);
    for line in text.split("\r\n") {
        let Some((name, value)) = line.split_once(':') else {
            continue;
        };
        if name.trim().eq_ignore_ascii_case("content-length") {
            return value.trim().parse::<usize>().map_err(|_| {
                format!(
                    "the Content-Length `{}` is not a whole number of bytes",
                    value.trim()
                )
            });
        }
    }
    Err(
        "a message header without Content-Length; each message starts with \
         `Content-Length: N` (N bytes of JSON after the empty line)"
            .to_string(),
    )
}

/// A JSON-RPC error reply.
fn error(id: Value, code: i64, message: &str) -> Value {
    json!({
        "jsonrpc": "2.0",
        "id": id,
        "error": { "code": code, "message": format!("sdeck: {message}") },
    })
}

/// Whether a body is one JSON-RPC 2.0 message tower-lsp decodes; the error reply if not.
pub fn check_message(body: &[u8]) -> Result<(), Value> {
    let value: Value = serde_json::from_slice(body).map_err(|e| {
        error(
            Value::Null,
            -32700,
            &format!("the message is not valid JSON ({e})"),
        )
    })?;
    let Some(object) = value.as_object() else {
        let what = if value.is_array() {
            "a JSON array (batches are not part of the protocol)"
        } else {
            "not a JSON object"
        };
        return Err(error(
            Value::Null,
            -32600,
            &format!("the message is {what}; send one JSON-RPC object per message"),
        ));
    };
    let id = match object.get("id") {
        Some(id @ (Value::Number(_) | Value::String(_))) => id.clone(),
        _ => Value::Null,
    };
    if object.get("jsonrpc").and_then(Value::as_str) != Some("2.0") {
        return Err(error(id, -32600, "the message lacks \"jsonrpc\": \"2.0\""));
    }
    let request = serde_json::from_value::<tower_lsp::jsonrpc::Request>(value.clone());
    let response = serde_json::from_value::<tower_lsp::jsonrpc::Response>(value);
    if request.is_err() && response.is_err() {
        return Err(error(
            id,
            -32600,
            "the message is neither a request (a \"method\", and \"params\" as an object or \
             array), a notification, nor a response (an \"id\" with a \"result\" or an \"error\")",
        ));
    }
    Ok(())
}

/// A message with `"params": null` as one without params. The protocol lets a client send
/// either for a method that takes none (`shutdown`, `exit`), and Emacs 28's eglot sends
/// `null`; tower-lsp takes only the absent form and would refuse `shutdown` with "Unexpected
/// params: null", leaving the editor waiting on its way out. A message that needs params
/// gets tower-lsp's own error either way.
pub fn without_null_params(body: &[u8]) -> std::borrow::Cow<'_, [u8]> {
    use std::borrow::Cow;
    if find(body, b"null").is_none() {
        return Cow::Borrowed(body);
    }
    let Ok(mut value) = serde_json::from_slice::<Value>(body) else {
        return Cow::Borrowed(body);
    };
    match value.as_object_mut() {
        Some(object) if object.get("params") == Some(&Value::Null) => {
            object.remove("params");
            match serde_json::to_vec(&value) {
                Ok(bytes) => Cow::Owned(bytes),
                Err(_) => Cow::Borrowed(body),
            }
        }
        _ => Cow::Borrowed(body),
    }
}

/// The two ends tower-lsp serves on: its input (checked frames) and its output.
pub struct Pipes {
    pub input: DuplexStream,
    pub output: DuplexStream,
}

/// Starts the reader of `stdin` and the writer of `stdout`; `on_end` runs when `stdin`
/// ends (the client is gone).
///
/// Standard output is written by a thread of its own, one whole frame per write: tokio's
/// `Stdout` would hand every write and every flush to the blocking pool, two more
/// threads to wake for every answer.
pub fn start<I, O>(stdin: I, stdout: O, on_end: impl FnOnce() + Send + 'static) -> Pipes
where
    I: AsyncRead + Unpin + Send + 'static,
    O: std::io::Write + Send + 'static,
{
    let (input, mut feed) = tokio::io::duplex(1 << 16);
    let (output, mut drain) = tokio::io::duplex(1 << 16);
    let (frames, to_write) = std::sync::mpsc::channel::<Vec<u8>>();
    // tower-lsp's output, split into whole frames.
    let from_server = frames.clone();
    tokio::spawn(async move {
        let mut reader = Reader::trusted();
        let mut chunk = vec![0u8; 1 << 16];
        loop {
            let Ok(n) = drain.read(&mut chunk).await else {
                return;
            };
            if n == 0 {
                return;
            }
            reader.push(&chunk[..n]);
            while let Frame::Message(body) = reader.next_frame() {
                if from_server.send(body).is_err() {
                    return;
                }
            }
        }
    });
    // Standard output: one whole frame at a time, in order.
    std::thread::spawn(move || {
        let mut stdout = stdout;
        while let Ok(body) = to_write.recv() {
            let framed = frame(&body);
            if stdout.write_all(&framed).is_err() || stdout.flush().is_err() {
                return;
            }
            trace::written(&body);
        }
    });
    // Standard input: checked frames to tower-lsp, error replies to the client.
    tokio::spawn(async move {
        let mut stdin = stdin;
        let mut reader = Reader::default();
        let mut chunk = vec![0u8; 1 << 16];
        loop {
            let n = stdin.read(&mut chunk).await.unwrap_or(0);
            if n == 0 {
                break;
            }
            reader.push(&chunk[..n]);
            loop {
                match reader.next_frame() {
                    Frame::Incomplete => break,
                    Frame::Message(body) => {
                        trace::read(&body);
                        let body = without_null_params(&body);
                        if feed.write_all(&frame(&body)).await.is_err() {
                            break;
                        }
                    }
                    Frame::Reply(reply) => {
                        let _ = frames.send(reply.to_string().into_bytes());
                    }
                }
            }
        }
        on_end();
    });
    Pipes { input, output }
}

/// Standard output without the line buffering of `std::io::stdout()`, which would write
/// a frame in two pieces (its header, then its body at the flush).
pub fn raw_stdout() -> Box<dyn std::io::Write + Send> {
    #[cfg(unix)]
    {
        use std::os::fd::AsFd;
        if let Ok(fd) = std::io::stdout().as_fd().try_clone_to_owned() {
            return Box::new(std::fs::File::from(fd));
        }
    }
    Box::new(std::io::stdout())
}

fn frame(body: &[u8]) -> Vec<u8> {
    let mut out = format!("Content-Length: {}\r\n\r\n", body.len()).into_bytes();
    out.extend_from_slice(body);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn framed(body: &str) -> Vec<u8> {
        frame(body.as_bytes())
    }

    fn all(reader: &mut Reader) -> Vec<Frame> {
        let mut out = Vec::new();
        loop {
            match reader.next_frame() {
                Frame::Incomplete => return out,
                f => out.push(f),
            }
        }
    }

    fn code(frame: &Frame) -> i64 {
        match frame {
            Frame::Reply(v) => v["error"]["code"].as_i64().unwrap_or(0),
            _ => 0,
        }
    }

    const GOOD: &str = r#"{"jsonrpc":"2.0","id":1,"method":"shutdown"}"#;

    #[test]
    fn null_params_read_as_none_and_other_messages_pass_unchanged() {
        let shutdown = br#"{"jsonrpc":"2.0","id":4,"method":"shutdown","params":null}"#;
        let read: Value = serde_json::from_slice(&without_null_params(shutdown)).unwrap();
        assert_eq!(
            read,
            json!({"jsonrpc": "2.0", "id": 4, "method": "shutdown"})
        );
        for body in [
            &br#"{"jsonrpc":"2.0","method":"exit"}"#[..],
            br#"{"jsonrpc":"2.0","id":1,"result":null}"#,
            br#"{"jsonrpc":"2.0","method":"x","params":{"a":null}}"#,
            b"not json null",
        ] {
            assert_eq!(&*without_null_params(body), body);
        }
    }

    #[test]
    fn a_good_frame_split_anywhere_comes_out_whole() {
        let bytes = framed(GOOD);
        for cut in 0..bytes.len() {
            let mut reader = Reader::default();
            reader.push(&bytes[..cut]);
            let mut frames = all(&mut reader);
            reader.push(&bytes[cut..]);
            frames.extend(all(&mut reader));
            assert_eq!(
                frames,
                vec![Frame::Message(GOOD.as_bytes().to_vec())],
                "{cut}"
            );
        }
    }

    #[test]
    fn bad_frames_get_their_error_and_the_next_frame_is_read() {
        let mut bytes = Vec::new();
        bytes.extend(framed("{not json"));
        bytes.extend(framed("[1, 2]"));
        bytes.extend(framed(r#"{"id": 4, "method": "shutdown"}"#));
        bytes.extend(b"Content-Type: application/json\r\n\r\n{\"jsonrpc\":\"2.0\"}");
        bytes.extend(framed(r#"{"jsonrpc":"2.0","id":{"a":1},"method":"x"}"#));
        bytes.extend(framed(GOOD));
        let mut reader = Reader::default();
        reader.push(&bytes);
        let frames = all(&mut reader);
        let codes: Vec<i64> = frames.iter().map(code).collect();
        assert_eq!(codes, vec![-32700, -32600, -32600, -32700, -32600, 0]);
        assert_eq!(frames[2], Frame::Reply(frames_id(&frames[2], 4)));
        assert_eq!(
            frames.last(),
            Some(&Frame::Message(GOOD.as_bytes().to_vec()))
        );
    }

    fn frames_id(frame: &Frame, id: i64) -> Value {
        let Frame::Reply(v) = frame else {
            return Value::Null;
        };
        assert_eq!(v["id"], json!(id));
        v.clone()
    }

    #[test]
    fn a_frame_past_the_limit_is_skipped_without_being_held() {
        let mut reader = Reader::default();
        reader.push(format!("Content-Length: {}\r\n\r\n", MAX_FRAME_BYTES + 10).as_bytes());
        assert_eq!(code(&reader.next_frame()), -32700);
        let body = vec![b' '; MAX_FRAME_BYTES + 10];
        for piece in body.chunks(1 << 20) {
            reader.push(piece);
            assert_eq!(reader.next_frame(), Frame::Incomplete);
        }
        reader.push(&framed(GOOD));
        assert_eq!(
            reader.next_frame(),
            Frame::Message(GOOD.as_bytes().to_vec())
        );
    }

    #[test]
    fn a_header_that_never_ends_is_an_error() {
        let mut reader = Reader::default();
        reader.push(&vec![b'x'; MAX_HEADER_BYTES + 1]);
        assert_eq!(code(&reader.next_frame()), -32700);
        reader.push(&framed(GOOD));
        assert_eq!(
            reader.next_frame(),
            Frame::Message(GOOD.as_bytes().to_vec())
        );
    }
}
