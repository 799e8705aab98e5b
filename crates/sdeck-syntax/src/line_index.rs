//! Byte offsets to line/column and back, in UTF-8 bytes, UTF-16 code units or characters.
//!
//! Analysis works in byte offsets; only the faces convert, through this one index. Lines
//! that are pure ASCII take a fast path (every encoding agrees on them).

/// How columns are counted.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Encoding {
    Utf8,
    Utf16,
    /// Unicode scalar values (what a person counts, and what `sdeck check` reports).
    Chars,
}

/// A zero-based line and column.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct LineCol {
    pub line: u32,
    pub col: u32,
}

/// The start offset of every line, and whether the line is ASCII.
#[derive(Clone, Debug)]
pub struct LineIndex {
    starts: Vec<usize>,
    ascii: Vec<bool>,
    len: usize,
}

impl LineIndex {
    pub fn new(text: &str) -> LineIndex {
        // Lines end at LF, CRLF or a lone CR (see [`crate::lines`]).
        let mut starts = vec![0];
        let mut ascii = Vec::new();
        let mut line_ascii = true;
        let bytes = text.as_bytes();
        for (i, &b) in bytes.iter().enumerate() {
            let ends_line = b == b'\n' || (b == b'\r' && bytes.get(i + 1) != Some(&b'\n'));
            if ends_line {
                starts.push(i + 1);
                ascii.push(line_ascii);
                line_ascii = true;
            } else if b >= 0x80 {
                line_ascii = false;
            }
        }
        ascii.push(line_ascii);
        LineIndex {
            starts,
            ascii,
            len: text.len(),
        }
    }

    pub fn line_count(&self) -> usize {
        self.starts.len()
    }

    /// The byte offset where `line` starts (clamped to the end of the text).
    pub fn line_start(&self, line: u32) -> usize {
        self.starts.get(line as usize).copied().unwrap_or(self.len)
    }

    /// Line and column of a byte offset. Offsets inside a character or past the end are
    /// clamped to the nearest valid position before them.
    pub fn line_col(&self, text: &str, offset: usize, encoding: Encoding) -> LineCol {
        let mut offset = offset.min(text.len());
        while !text.is_char_boundary(offset) {
            offset -= 1;
        }
        let line = match self.starts.binary_search(&offset) {
            Ok(l) => l,
            Err(l) => l - 1,
        };
        let start = self.starts[line];
        let col = if self.ascii.get(line).copied().unwrap_or(false) {
            offset - start
        } else {
            let slice = &text[start..offset];
            match encoding {
                Encoding::Utf8 => slice.len(),
                Encoding::Utf16 => slice.chars().map(char::len_utf16).sum(),
                Encoding::Chars => slice.chars().count(),
            }
        };
        LineCol {
            line: line as u32,
            col: col as u32,
        }
    }

    /// The byte offset of a line and column. A column past the end of its line is clamped
    /// to the line's end; a line past the end of the text gives the text's length; a
    /// column inside a UTF-16 surrogate pair or a UTF-8 sequence rounds down.
    pub fn offset(&self, text: &str, position: LineCol, encoding: Encoding) -> usize {
        let line = position.line as usize;
        let Some(&start) = self.starts.get(line) else {
            return text.len();
        };
        // The end of the line's content, before its break (LF, CRLF or CR).
        let end = match self.starts.get(line + 1) {
            Some(&next) if next >= 2 && text.get(next - 2..next) == Some("\r\n") => next - 2,
            Some(&next) => next - 1,
            None => text.len(),
        };
        let col = position.col as usize;
        if self.ascii.get(line).copied().unwrap_or(false) {
            return (start + col).min(end);
        }
        let slice = &text[start..end];
        let mut units = 0;
        for (i, c) in slice.char_indices() {
            if units >= col {
                return start + i;
            }
            units += match encoding {
                Encoding::Utf8 => c.len_utf8(),
                Encoding::Utf16 => c.len_utf16(),
                Encoding::Chars => 1,
            };
            if units > col {
                return start + i;
            }
        }
        end
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ascii_lines() {
        let text = "ab\ncd\n";
        let index = LineIndex::new(text);
        assert_eq!(
            index.line_col(text, 4, Encoding::Utf16),
            LineCol { line: 1, col: 1 }
        );
        assert_eq!(
            index.offset(text, LineCol { line: 1, col: 1 }, Encoding::Utf16),
            4
        );
        assert_eq!(
            index.line_col(text, 6, Encoding::Chars),
            LineCol { line: 2, col: 0 }
        );
    }

    #[test]
    fn greek_and_astral_characters_count_per_encoding() {
        // κ is 2 bytes, 1 UTF-16 unit; 𝜎 (U+1D70E) is 4 bytes, 2 UTF-16 units.
        let text = "κ𝜎x";
        let index = LineIndex::new(text);
        let x = text.find('x').unwrap_or(0);
        assert_eq!(index.line_col(text, x, Encoding::Utf8).col, 6);
        assert_eq!(index.line_col(text, x, Encoding::Utf16).col, 3);
        assert_eq!(index.line_col(text, x, Encoding::Chars).col, 2);
        for enc in [Encoding::Utf8, Encoding::Utf16, Encoding::Chars] {
            let lc = index.line_col(text, x, enc);
            assert_eq!(index.offset(text, lc, enc), x);
        }
    }

    #[test]
    fn lone_cr_and_crlf_end_lines_and_unicode_separators_do_not() {
        // The protocol's line breaks are LF, CRLF and CR; U+2028 is an ordinary character.
        let text = "a\rb\r\nc\u{2028}d\ne";
        let index = LineIndex::new(text);
        assert_eq!(index.line_count(), 4);
        let d = text.find('d').unwrap_or(0);
        assert_eq!(
            index.line_col(text, d, Encoding::Utf16),
            LineCol { line: 2, col: 2 }
        );
        // A column past the end stops before the break, whichever it is.
        assert_eq!(
            index.offset(text, LineCol { line: 0, col: 9 }, Encoding::Utf16),
            1
        );
        assert_eq!(
            index.offset(text, LineCol { line: 1, col: 9 }, Encoding::Utf16),
            3
        );
        assert_eq!(
            index.line_col(text, text.len(), Encoding::Chars),
            LineCol { line: 3, col: 1 }
        );
    }

    #[test]
    fn out_of_range_positions_clamp() {
        let text = "ab\nκ";
        let index = LineIndex::new(text);
        assert_eq!(
            index.offset(text, LineCol { line: 0, col: 99 }, Encoding::Utf16),
            2
        );
        assert_eq!(
            index.offset(text, LineCol { line: 9, col: 0 }, Encoding::Utf16),
            text.len()
        );
        // An offset inside κ rounds down to its start.
        assert_eq!(
            index.line_col(text, 4, Encoding::Chars),
            LineCol { line: 1, col: 0 }
        );
    }
}
