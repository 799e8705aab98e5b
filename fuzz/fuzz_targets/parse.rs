//! The parser never panics, and every span it reports lies inside the text on
//! character boundaries.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let file = sdeck_syntax::parse(text);
    for d in &file.diagnostics {
        assert!(d.span.start <= d.span.end && d.span.end <= text.len());
        assert!(text.is_char_boundary(d.span.start) && text.is_char_boundary(d.span.end));
    }
    // One definition of a line (LF, CRLF, CR): the line index that places diagnostics
    // and the rope that holds the editor's text agree on every reported offset.
    let index = sdeck_syntax::LineIndex::new(text);
    let rope = ropey::Rope::from_str(text);
    for d in &file.diagnostics {
        for offset in [d.span.start, d.span.end] {
            let at = index.line_col(text, offset, sdeck_syntax::Encoding::Utf16);
            let line = rope.byte_to_line(offset);
            let column = rope.char_to_utf16_cu(rope.byte_to_char(offset))
                - rope.char_to_utf16_cu(rope.line_to_char(line));
            assert_eq!((at.line as usize, at.col as usize), (line, column), "at {offset}");
        }
    }
});
