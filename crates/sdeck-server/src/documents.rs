//! The open documents: one rope per URI, edited in the order the edits arrive.
//!
//! Ordering is the whole point of this module. tower-lsp may run notification handlers
//! concurrently, so an edit applied after an `.await` could overtake the one before it.
//! Every edit is therefore applied here, synchronously, under one `std` mutex, by the
//! first (non-async) statement of the handler; no handler awaits before its edit is in.
//! An edit batch is applied to a copy of the rope (cheap: ropes share their nodes) and
//! committed only when every change in it applied, so a bad change leaves the document
//! exactly as it was.

use crate::analysis::ProjectSettings;
use ropey::Rope;
use std::collections::HashMap;
use std::sync::{Arc, Mutex, MutexGuard};
use tower_lsp::lsp_types::{Position, TextDocumentContentChangeEvent, Url};

/// How the client counts columns.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PositionEncoding {
    Utf8,
    Utf16,
}

impl PositionEncoding {
    pub fn syntax(self) -> sdeck_syntax::Encoding {
        match self {
            PositionEncoding::Utf8 => sdeck_syntax::Encoding::Utf8,
            PositionEncoding::Utf16 => sdeck_syntax::Encoding::Utf16,
        }
    }
}

/// One open document.
#[derive(Clone, Debug)]
pub struct Document {
    pub rope: Rope,
    /// The client's version of the text.
    pub version: i32,
    /// What the project that governs the file says about it.
    pub project: Arc<ProjectSettings>,
    /// The model's default name (the file's stem).
    pub stem: String,
}

/// A consistent copy of a document's text, for analysis off the lock.
#[derive(Clone, Debug)]
pub struct TextSnapshot {
    pub text: String,
    pub version: i32,
    pub project: Arc<ProjectSettings>,
    pub stem: String,
}

/// Why an edit was not applied.
#[derive(Clone, Debug, PartialEq)]
pub enum EditError {
    NotOpen,
    /// A change whose range ends before it starts.
    InvertedRange {
        start: Position,
        end: Position,
    },
    /// The version did not increase: the edit is older than the text held.
    StaleVersion {
        held: i32,
        received: i32,
    },
}

impl std::fmt::Display for EditError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            EditError::NotOpen => write!(f, "the document is not open"),
            EditError::InvertedRange { start, end } => write!(
                f,
                "a change's range ends ({}:{}) before it starts ({}:{})",
                end.line, end.character, start.line, start.character
            ),
            EditError::StaleVersion { held, received } => write!(
                f,
                "an edit for version {received} arrived while version {held} is held"
            ),
        }
    }
}

/// Every open document, behind one synchronous lock.
#[derive(Default)]
pub struct DocumentStore {
    documents: Mutex<HashMap<Url, Document>>,
}

impl DocumentStore {
    fn lock(&self) -> MutexGuard<'_, HashMap<Url, Document>> {
        // A panic while the lock was held cannot have left a half-applied edit (edits
        // are committed whole), so a poisoned lock still guards consistent data.
        self.documents.lock().unwrap_or_else(|p| p.into_inner())
    }

    pub fn open(&self, uri: Url, text: &str, version: i32, project: ProjectSettings) {
        let stem = stem_of(&uri);
        self.lock().insert(
            uri,
            Document {
                rope: Rope::from_str(text),
                version,
                project: Arc::new(project),
                stem,
            },
        );
    }

    pub fn close(&self, uri: &Url) {
        self.lock().remove(uri);
    }

    pub fn set_project(&self, uri: &Url, project: ProjectSettings) {
        if let Some(doc) = self.lock().get_mut(uri) {
            doc.project = Arc::new(project);
        }
    }

    /// Applies a batch of changes in order, all or nothing.
    pub fn apply(
        &self,
        uri: &Url,
        version: i32,
        changes: &[TextDocumentContentChangeEvent],
        encoding: PositionEncoding,
    ) -> Result<(), EditError> {
        let mut documents = self.lock();
        let doc = documents.get_mut(uri).ok_or(EditError::NotOpen)?;
        if version <= doc.version {
            return Err(EditError::StaleVersion {
                held: doc.version,
                received: version,
            });
        }
        let mut rope = doc.rope.clone();
        for change in changes {
            apply_change(&mut rope, change, encoding)?;
        }
        doc.rope = rope;
        doc.version = version;
        Ok(())
    }

    pub fn version(&self, uri: &Url) -> Option<i32> {
        self.lock().get(uri).map(|d| d.version)
    }

    pub fn snapshot(&self, uri: &Url) -> Option<TextSnapshot> {
        let documents = self.lock();
        let doc = documents.get(uri)?;
        // Copy the rope (O(1)) under the lock and build the string after releasing it.
        let rope = doc.rope.clone();
        let version = doc.version;
        let project = doc.project.clone();
        let stem = doc.stem.clone();
        drop(documents);
        Some(TextSnapshot {
            text: rope.to_string(),
            version,
            project,
            stem,
        })
    }

    pub fn uris(&self) -> Vec<Url> {
        self.lock().keys().cloned().collect()
    }
}

/// The file's stem from its URI, the model's default name.
pub fn stem_of(uri: &Url) -> String {
    uri.path_segments()
        .and_then(|mut s| s.next_back())
        .map(|last| {
            let decoded = percent_decode(last);
            match decoded.rsplit_once('.') {
                Some((stem, _)) if !stem.is_empty() => stem.to_string(),
                _ => decoded,
            }
        })
        .filter(|s| !s.is_empty())
        .unwrap_or_else(|| "model".to_string())
}

fn percent_decode(text: &str) -> String {
    let bytes = text.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] == b'%' && i + 2 < bytes.len() {
            if let Ok(b) = u8::from_str_radix(text.get(i + 1..i + 3).unwrap_or(""), 16) {
                out.push(b);
                i += 3;
                continue;
            }
        }
        out.push(bytes[i]);
        i += 1;
    }
    String::from_utf8_lossy(&out).into_owned()
}

/// Applies one change to a rope.
fn apply_change(
    rope: &mut Rope,
    change: &TextDocumentContentChangeEvent,
    encoding: PositionEncoding,
) -> Result<(), EditError> {
    let Some(range) = change.range else {
        *rope = Rope::from_str(&change.text);
        return Ok(());
    };
    let start = char_index(rope, range.start, encoding);
    let end = char_index(rope, range.end, encoding);
    if end < start {
        return Err(EditError::InvertedRange {
            start: range.start,
            end: range.end,
        });
    }
    rope.remove(start..end);
    rope.insert(start, &change.text);
    Ok(())
}

/// The char index of a protocol position. A line past the end gives the end of the
/// text; a column past the end of its line gives the line's end (before its line
/// break), as the protocol asks; a column inside a character rounds down.
pub fn char_index(rope: &Rope, position: Position, encoding: PositionEncoding) -> usize {
    let line = position.line as usize;
    if line >= rope.len_lines() {
        return rope.len_chars();
    }
    let line_start = rope.line_to_char(line);
    let slice = rope.line(line);
    // The line's content without its line break (LF, CRLF or CR: the rope is built
    // without `unicode_lines`, so these are its only breaks, as in the protocol).
    let mut content_chars = slice.len_chars();
    if content_chars > 0 && slice.char(content_chars - 1) == '\n' {
        content_chars -= 1;
    }
    if content_chars > 0 && slice.char(content_chars - 1) == '\r' {
        content_chars -= 1;
    }
    let content = slice.slice(..content_chars);
    let col = position.character as usize;
    let chars_in = match encoding {
        PositionEncoding::Utf16 => {
            let units = content.len_utf16_cu();
            content.utf16_cu_to_char(col.min(units))
        }
        PositionEncoding::Utf8 => {
            let bytes = content.len_bytes();
            content.byte_to_char(col.min(bytes))
        }
    };
    line_start + chars_in.min(content_chars)
}

#[cfg(test)]
mod tests {
    use super::*;
    use tower_lsp::lsp_types::Range;

    fn uri() -> Url {
        Url::parse("file:///tmp/models/%CE%BA_rate.sde").expect("a valid URI")
    }

    fn change(l0: u32, c0: u32, l1: u32, c1: u32, text: &str) -> TextDocumentContentChangeEvent {
        TextDocumentContentChangeEvent {
            range: Some(Range {
                start: Position {
                    line: l0,
                    character: c0,
                },
                end: Position {
                    line: l1,
                    character: c1,
                },
            }),
            range_length: None,
            text: text.to_string(),
        }
    }

    fn text(store: &DocumentStore) -> String {
        store.snapshot(&uri()).map(|s| s.text).unwrap_or_default()
    }

    #[test]
    fn the_stem_is_decoded_from_the_uri() {
        assert_eq!(stem_of(&uri()), "κ_rate");
    }

    #[test]
    fn edits_in_utf16_columns_around_greek_and_emoji() {
        let store = DocumentStore::default();
        // κ is one UTF-16 unit, 🚀 two.
        store.open(
            uri(),
            "param κ = 1 # 🚀 go\n",
            1,
            ProjectSettings::default(),
        );
        // Replace "go" (after 🚀 and a space: columns 17..19 in UTF-16).
        let r = store.apply(
            &uri(),
            2,
            &[change(0, 17, 0, 19, "up")],
            PositionEncoding::Utf16,
        );
        assert_eq!(r, Ok(()));
        assert_eq!(text(&store), "param κ = 1 # 🚀 up\n");
        // The same place in UTF-8 bytes: κ is 2 bytes, 🚀 4.
        let r = store.apply(
            &uri(),
            3,
            &[change(0, 20, 0, 22, "go")],
            PositionEncoding::Utf8,
        );
        assert_eq!(r, Ok(()));
        assert_eq!(text(&store), "param κ = 1 # 🚀 go\n");
    }

    #[test]
    fn a_batch_is_applied_in_order() {
        let store = DocumentStore::default();
        store.open(uri(), "ab\n", 1, ProjectSettings::default());
        let batch = [change(0, 2, 0, 2, "c"), change(0, 0, 0, 1, "")];
        assert_eq!(
            store.apply(&uri(), 2, &batch, PositionEncoding::Utf16),
            Ok(())
        );
        assert_eq!(text(&store), "bc\n");
    }

    #[test]
    fn a_bad_change_leaves_the_document_untouched() {
        let store = DocumentStore::default();
        store.open(uri(), "abc\n", 1, ProjectSettings::default());
        let batch = [change(0, 0, 0, 1, "X"), change(0, 2, 0, 1, "Y")];
        let r = store.apply(&uri(), 2, &batch, PositionEncoding::Utf16);
        assert!(matches!(r, Err(EditError::InvertedRange { .. })));
        assert_eq!(text(&store), "abc\n");
        assert_eq!(store.version(&uri()), Some(1));
    }

    #[test]
    fn an_older_version_is_refused_and_a_newer_one_kept() {
        let store = DocumentStore::default();
        store.open(uri(), "a\n", 5, ProjectSettings::default());
        let r = store.apply(
            &uri(),
            4,
            &[change(0, 0, 0, 0, "z")],
            PositionEncoding::Utf16,
        );
        assert_eq!(
            r,
            Err(EditError::StaleVersion {
                held: 5,
                received: 4
            })
        );
        assert_eq!(text(&store), "a\n");
    }

    #[test]
    fn positions_past_the_end_clamp_instead_of_panicking() {
        let store = DocumentStore::default();
        store.open(uri(), "ab\r\ncd", 1, ProjectSettings::default());
        // Column 99 on line 0 is the end of "ab" (before \r\n); line 99 is the end.
        let batch = [change(0, 99, 0, 99, "!"), change(99, 0, 99, 5, "?")];
        assert_eq!(
            store.apply(&uri(), 2, &batch, PositionEncoding::Utf16),
            Ok(())
        );
        assert_eq!(text(&store), "ab!\r\ncd?");
        // A column in the middle of a surrogate pair rounds down to the pair's start.
        store.open(uri(), "🚀x", 1, ProjectSettings::default());
        assert_eq!(
            store.apply(
                &uri(),
                2,
                &[change(0, 1, 0, 1, "<")],
                PositionEncoding::Utf16
            ),
            Ok(())
        );
        assert_eq!(text(&store), "<🚀x");
    }

    #[test]
    fn only_lf_crlf_and_cr_break_lines() {
        // U+2028, U+2029, U+0085, VT and FF are ordinary characters to the protocol: an
        // edit on the line after one lands on that line, not inside the comment.
        for odd in ['\u{2028}', '\u{2029}', '\u{85}', '\u{b}', '\u{c}'] {
            let store = DocumentStore::default();
            let before = format!("# a{odd}b\nparam k = 1\n");
            store.open(uri(), &before, 1, ProjectSettings::default());
            let r = store.apply(
                &uri(),
                2,
                &[change(1, 10, 1, 11, "2")],
                PositionEncoding::Utf16,
            );
            assert_eq!(r, Ok(()));
            assert_eq!(text(&store), format!("# a{odd}b\nparam k = 2\n"), "{odd:?}");
        }
    }

    #[test]
    fn a_column_past_the_end_of_a_line_ending_in_cr_stays_on_that_line() {
        let store = DocumentStore::default();
        store.open(uri(), "ab\rcd\r\nef", 1, ProjectSettings::default());
        let batch = [change(0, 99, 0, 99, "!"), change(1, 99, 1, 99, "?")];
        assert_eq!(
            store.apply(&uri(), 2, &batch, PositionEncoding::Utf16),
            Ok(())
        );
        assert_eq!(text(&store), "ab!\rcd?\r\nef");
        // Line 2 starts after the CRLF.
        assert_eq!(
            store.apply(
                &uri(),
                3,
                &[change(2, 0, 2, 0, ">")],
                PositionEncoding::Utf16
            ),
            Ok(())
        );
        assert_eq!(text(&store), "ab!\rcd?\r\n>ef");
    }

    #[test]
    fn edits_from_many_threads_are_never_lost() {
        // Each thread appends its own line; whatever the interleaving, every edit lands
        // whole and the versions count every edit once.
        let store = Arc::new(DocumentStore::default());
        store.open(uri(), "", 0, ProjectSettings::default());
        let next_version = Arc::new(Mutex::new(0));
        let handles: Vec<_> = (0..4)
            .map(|t| {
                let store = store.clone();
                let next_version = next_version.clone();
                std::thread::spawn(move || {
                    for i in 0..100 {
                        // The version is taken and the edit applied under one lock, as
                        // a client sends them: in order.
                        let mut v = next_version.lock().unwrap_or_else(|p| p.into_inner());
                        *v += 1;
                        let line = format!("t{t} e{i}\n");
                        let r = store.apply(
                            &uri(),
                            *v,
                            &[change(u32::MAX, 0, u32::MAX, 0, &line)],
                            PositionEncoding::Utf16,
                        );
                        assert_eq!(r, Ok(()));
                    }
                })
            })
            .collect();
        for h in handles {
            assert!(h.join().is_ok());
        }
        let text = text(&store);
        assert_eq!(text.lines().count(), 400);
        assert_eq!(store.version(&uri()), Some(400));
        for t in 0..4 {
            let mine: Vec<&str> = text
                .lines()
                .filter(|l| l.starts_with(&format!("t{t} ")))
                .collect();
            let expected: Vec<String> = (0..100).map(|i| format!("t{t} e{i}")).collect();
            assert_eq!(mine, expected);
        }
    }
}
