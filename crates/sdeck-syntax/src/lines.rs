//! What a line is, for every part of sdeck: a line ends at LF, CRLF or a lone CR, the
//! three line breaks of the language server protocol. No other character (U+2028,
//! U+2029, U+0085, vertical tab, form feed) breaks a line, so the server's positions,
//! the CLI's line numbers, the statement splitter and the formatter always agree.

/// One line of a text: where it starts, its content (without the break) and its break
/// (`"\n"`, `"\r\n"`, `"\r"`, or `""` for the last line).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Line<'a> {
    pub start: usize,
    pub content: &'a str,
    pub line_break: &'a str,
}

impl Line<'_> {
    /// The offset just after the line's content (where its break starts).
    pub fn content_end(&self) -> usize {
        self.start + self.content.len()
    }

    /// The offset just after the line's break (where the next line starts).
    pub fn end(&self) -> usize {
        self.content_end() + self.line_break.len()
    }
}

/// The lines of `text` with their breaks. A text ending in a break has no empty last
/// line here (as `str::lines`); an empty text has no lines.
pub fn lines(text: &str) -> impl Iterator<Item = Line<'_>> {
    let bytes = text.as_bytes();
    let mut at = 0;
    std::iter::from_fn(move || {
        if at >= text.len() {
            return None;
        }
        let start = at;
        let mut i = start;
        while i < bytes.len() && bytes[i] != b'\n' && bytes[i] != b'\r' {
            i += 1;
        }
        let break_len = match bytes.get(i) {
            None => 0,
            Some(b'\r') if bytes.get(i + 1) == Some(&b'\n') => 2,
            Some(_) => 1,
        };
        at = i + break_len;
        Some(Line {
            start,
            content: &text[start..i],
            line_break: &text[i..i + break_len],
        })
    })
}

/// The offset where the line holding `offset` starts.
pub fn line_start(text: &str, offset: usize) -> usize {
    let offset = offset.min(text.len());
    text.as_bytes()[..offset]
        .iter()
        .rposition(|&b| b == b'\n' || b == b'\r')
        .map(|i| i + 1)
        .unwrap_or(0)
}

/// The offset where the content of the line holding `offset` ends (before its break).
pub fn line_end(text: &str, offset: usize) -> usize {
    let offset = offset.min(text.len());
    text.as_bytes()[offset..]
        .iter()
        .position(|&b| b == b'\n' || b == b'\r')
        .map(|i| offset + i)
        .unwrap_or(text.len())
}

/// The offset just after the break of the line holding `offset` (the text's length on
/// the last line).
pub fn next_line_start(text: &str, offset: usize) -> usize {
    let end = line_end(text, offset);
    let bytes = text.as_bytes();
    match bytes.get(end) {
        None => end,
        Some(b'\r') if bytes.get(end + 1) == Some(&b'\n') => end + 2,
        Some(_) => end + 1,
    }
}

/// The file's line break: the first one it uses, LF for a text without any.
pub fn first_break(text: &str) -> &'static str {
    match lines(text).next().map(|l| l.line_break) {
        Some("\r\n") => "\r\n",
        Some("\r") => "\r",
        _ => "\n",
    }
}

/// `text` with every line break (LF, CRLF, CR) written as `line_break`.
pub fn with_breaks(text: &str, line_break: &str) -> String {
    let mut out = String::with_capacity(text.len() + text.len() / 16);
    for line in lines(text) {
        out.push_str(line.content);
        if !line.line_break.is_empty() {
            out.push_str(line_break);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lf_crlf_and_lone_cr_break_lines_and_nothing_else_does() {
        let text = "a\nb\r\nc\rd\u{2028}e\u{2029}f\u{85}g\u{b}h\u{c}i";
        let contents: Vec<&str> = lines(text).map(|l| l.content).collect();
        assert_eq!(
            contents,
            vec!["a", "b", "c", "d\u{2028}e\u{2029}f\u{85}g\u{b}h\u{c}i"]
        );
        let breaks: Vec<&str> = lines(text).map(|l| l.line_break).collect();
        assert_eq!(breaks, vec!["\n", "\r\n", "\r", ""]);
    }

    #[test]
    fn line_start_and_end_around_each_break() {
        let text = "ab\r\ncd\ref";
        assert_eq!(line_end(text, 0), 2);
        assert_eq!(next_line_start(text, 0), 4);
        assert_eq!(line_start(text, 5), 4);
        assert_eq!(line_end(text, 5), 6);
        assert_eq!(next_line_start(text, 5), 7);
        assert_eq!(line_start(text, 8), 7);
        assert_eq!(line_end(text, 8), text.len());
    }

    #[test]
    fn the_first_break_is_the_files_break() {
        assert_eq!(first_break("a\r\nb\n"), "\r\n");
        assert_eq!(first_break("a\rb"), "\r");
        assert_eq!(first_break("a"), "\n");
        assert_eq!(with_breaks("a\nb\rc\r\n", "\r\n"), "a\r\nb\r\nc\r\n");
    }
}
