//! The editor's text always equals the client's: random batches of incremental edits,
//! with positions anywhere (past a line's end, past the last line, inside a character,
//! between the CR and LF of a break), in UTF-16 and UTF-8 columns, are applied to the
//! server's document store and to a plain reference implementation of the protocol's
//! rules; after every batch the two texts are equal, and a batch with a bad change
//! leaves the text as it was.
//!
//! The reference follows the Language Server Protocol 3.17 text-document rules: a
//! line ends at LF, CRLF or CR; a position past a line's end is the line's end; a line
//! past the last is the end of the text. Inside a character, a column rounds down.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sdeck_server::documents::{DocumentStore, PositionEncoding};
use sdeck_server::lsp_types::{Position, Range, TextDocumentContentChangeEvent, Url};

/// Byte ranges of each line's content (without its break), by the protocol's rule.
fn lines(text: &str) -> Vec<(usize, usize)> {
    let bytes = text.as_bytes();
    let mut out = Vec::new();
    let mut start = 0;
    let mut i = 0;
    while i < bytes.len() {
        match bytes[i] {
            b'\n' => {
                out.push((start, i));
                i += 1;
                start = i;
            }
            b'\r' => {
                out.push((start, i));
                i += if bytes.get(i + 1) == Some(&b'\n') { 2 } else { 1 };
                start = i;
            }
            _ => i += 1,
        }
    }
    out.push((start, bytes.len()));
    out
}

fn offset(text: &str, position: Position, encoding: PositionEncoding) -> usize {
    let lines = lines(text);
    let Some(&(start, end)) = lines.get(position.line as usize) else {
        return text.len();
    };
    let mut units = 0usize;
    for (i, c) in text[start..end].char_indices() {
        let width = match encoding {
            PositionEncoding::Utf16 => c.len_utf16(),
            PositionEncoding::Utf8 => c.len_utf8(),
        };
        if units + width > position.character as usize {
            return start + i;
        }
        units += width;
    }
    end
}

/// Reads the fuzz input as an initial text and a list of batches of edits.
struct Input<'a> {
    data: &'a [u8],
}

impl<'a> Input<'a> {
    fn byte(&mut self) -> Option<u8> {
        let (&b, rest) = self.data.split_first()?;
        self.data = rest;
        Some(b)
    }
    fn text(&mut self) -> Option<String> {
        let len = self.byte()? as usize % 24;
        let take = len.min(self.data.len());
        let (head, rest) = self.data.split_at(take);
        self.data = rest;
        // Line breaks and multi-unit characters are what the rules are about: map a few
        // bytes onto them so that short inputs reach them often.
        Some(
            String::from_utf8_lossy(head)
                .chars()
                .map(|c| match c {
                    '\u{1}' => '\r',
                    '\u{2}' => '\u{2028}',
                    '\u{3}' => '😀',
                    '\u{4}' => 'é',
                    '\u{5}' => '\u{85}',
                    '\u{6}' => '\u{c}',
                    c => c,
                })
                .collect(),
        )
    }
    fn position(&mut self) -> Option<Position> {
        Some(Position::new(
            (self.byte()? % 8) as u32,
            (self.byte()? % 40) as u32,
        ))
    }
}

fuzz_target!(|data: &[u8]| {
    let mut input = Input { data };
    let Some(initial) = input.text() else {
        return;
    };
    let Some(flags) = input.byte() else {
        return;
    };
    let encoding = if flags & 1 == 0 {
        PositionEncoding::Utf16
    } else {
        PositionEncoding::Utf8
    };
    let Ok(uri) = Url::parse("file:///fuzz/model.sde") else {
        return;
    };
    let store = DocumentStore::default();
    store.open(uri.clone(), &initial, 1, Default::default());
    let mut expected = initial;
    let mut version = 1;
    while let Some(batch_len) = input.byte() {
        version += 1;
        let mut changes = Vec::new();
        let mut reference = expected.clone();
        let mut rejected = false;
        for _ in 0..(batch_len % 4 + 1) {
            let (Some(start), Some(end), Some(text)) =
                (input.position(), input.position(), input.text())
            else {
                break;
            };
            let (a, b) = (
                offset(&reference, start, encoding),
                offset(&reference, end, encoding),
            );
            if b < a {
                rejected = true;
            } else if !rejected {
                reference.replace_range(a..b, &text);
            }
            changes.push(TextDocumentContentChangeEvent {
                range: Some(Range::new(start, end)),
                range_length: None,
                text,
            });
        }
        let applied = store.apply(&uri, version, &changes, encoding);
        assert_eq!(applied.is_ok(), !rejected, "{applied:?}");
        if applied.is_ok() {
            expected = reference;
        }
        let held = store.snapshot(&uri).map(|s| s.text).unwrap_or_default();
        assert_eq!(held, expected, "after {changes:?}");
    }
});
