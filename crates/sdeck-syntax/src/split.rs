//! Cutting a file into statements and collecting its comments.
//!
//! A statement starts on a line whose first token is a statement keyword or `dNAME =`;
//! every other line continues the statement before it. Cutting first and parsing each
//! piece afterwards gives recovery for free: one bad statement yields one error and the
//! rest of the file is still checked.

use crate::ast::Comment;
use sdeck_diagnostics::Span;

pub use crate::vocabulary::STATEMENT_KEYWORDS;

/// Keywords of the first version of the language and the words that replaced them. A
/// line that starts with one followed by a name still opens a statement, so that the
/// parser can name the new word instead of reporting a cascade of errors.
pub const RETIRED_KEYWORDS: [(&str, &str); 2] = [("state", "factor"), ("noise", "shock")];

/// A piece of the file that holds one statement (or stray text).
#[derive(Clone, Debug, PartialEq)]
pub struct Piece {
    /// From the first token to the last code character (comments after it excluded).
    pub span: Span,
    /// The first trailing comment on the statement's lines, if any.
    pub description: Option<String>,
}

pub(crate) fn is_ident_start(c: char) -> bool {
    c.is_alphabetic() || c == '_'
}

pub(crate) fn is_ident_char(c: char) -> bool {
    c.is_alphabetic() || c.is_ascii_digit() || c == '_'
}

/// Whether a line's code (comment removed) opens a new statement.
fn opens_statement(code: &str) -> bool {
    let trimmed = code.trim_start_matches([' ', '\t', '\r', '\u{FEFF}']);
    let word_len: usize = trimmed
        .char_indices()
        .find(|&(_, c)| !is_ident_char(c))
        .map(|(i, _)| i)
        .unwrap_or(trimmed.len());
    let word = &trimmed[..word_len];
    if word.is_empty() || !word.chars().next().is_some_and(is_ident_start) {
        return false;
    }
    if STATEMENT_KEYWORDS.contains(&word) {
        return true;
    }
    if RETIRED_KEYWORDS.iter().any(|(old, _)| *old == word) {
        let rest = &trimmed[word_len..];
        let after = rest.trim_start_matches([' ', '\t']);
        return after.len() < rest.len() && after.chars().next().is_some_and(is_ident_start);
    }
    if word.len() > 1 && word.starts_with('d') {
        let rest = trimmed[word_len..].trim_start_matches([' ', '\t', '\r']);
        // `dr/dt = ...`: a slip for an equation, reported as such by the parser.
        if let Some(over) = rest.strip_prefix('/') {
            let over = over.trim_start_matches([' ', '\t']);
            if let Some(after) = over.strip_prefix("dt") {
                return after.trim_start_matches([' ', '\t']).starts_with('=');
            }
        }
        return rest.starts_with('=') && !rest.starts_with("==");
    }
    // `d r = ...`: a slip for `dr = ...`, reported as such by the parser.
    if word == "d" {
        let rest = trimmed[1..].trim_start_matches([' ', '\t']);
        let name_len = rest
            .char_indices()
            .find(|&(_, c)| !is_ident_char(c))
            .map(|(i, _)| i)
            .unwrap_or(rest.len());
        return rest.len() < trimmed.len() - 1
            && name_len > 0
            && rest[name_len..]
                .trim_start_matches([' ', '\t'])
                .starts_with('=');
    }
    false
}

/// Cuts `text` into statement pieces and collects every comment.
pub fn split(text: &str) -> (Vec<Piece>, Vec<Comment>) {
    let mut pieces: Vec<Piece> = Vec::new();
    let mut comments = Vec::new();
    // The piece being built: (start, end of code, description).
    let mut current: Option<(usize, usize, Option<String>)> = None;
    // Lines end at LF, CRLF or a lone CR, as everywhere in sdeck.
    for line in crate::lines::lines(text) {
        let line_start = line.start;
        let content = line.content;
        let (code, comment) = match content.find('#') {
            Some(i) => (&content[..i], Some(i)),
            None => (content, None),
        };
        let has_code = !code.trim().is_empty();
        if let Some(i) = comment {
            let text_after = content[i + 1..].to_string();
            comments.push(Comment {
                span: line_start + i..line_start + content.len(),
                text: text_after,
                trailing: has_code,
            });
        }
        if has_code {
            let lead = code.len() - code.trim_start().len();
            let code_start = line_start + lead;
            let code_end = line_start + code.trim_end().len();
            let description = comment
                .map(|i| content[i + 1..].trim().to_string())
                .filter(|d| {
                    !d.is_empty()
                        && !d.starts_with("sdeck:")
                        && !d.starts_with("expect:")
                        && !d.starts_with("expect-next-line:")
                });
            if opens_statement(code) || current.is_none() {
                if let Some((start, end, desc)) = current.take() {
                    pieces.push(Piece {
                        span: start..end,
                        description: desc,
                    });
                }
                current = Some((code_start, code_end, description));
            } else if let Some((_, end, desc)) = current.as_mut() {
                *end = code_end;
                if desc.is_none() {
                    *desc = description;
                }
            }
        }
    }
    if let Some((start, end, desc)) = current {
        pieces.push(Piece {
            span: start..end,
            description: desc,
        });
    }
    (pieces, comments)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn texts(src: &str) -> Vec<&str> {
        split(src).0.iter().map(|p| &src[p.span.clone()]).collect()
    }

    #[test]
    fn cuts_at_keywords_and_equations() {
        let src = "param a = 1 # speed\nfactor x = 0\ndx = -a * x dt\n   + 0.1 dW\nshock W\n";
        assert_eq!(
            texts(src),
            vec![
                "param a = 1",
                "factor x = 0",
                "dx = -a * x dt\n   + 0.1 dW",
                "shock W"
            ]
        );
        assert_eq!(split(src).0[0].description.as_deref(), Some("speed"));
    }

    #[test]
    fn a_retired_keyword_followed_by_a_name_opens_a_statement() {
        let src = "param a = 1\nstate x = 0\nnoise W\nlet b = a\n  + state\n";
        assert_eq!(
            texts(src),
            vec![
                "param a = 1",
                "state x = 0",
                "noise W",
                "let b = a\n  + state"
            ]
        );
    }

    #[test]
    fn a_line_starting_with_dt_continues() {
        let src = "dx = a\n dt + b dW\n";
        assert_eq!(texts(src), vec!["dx = a\n dt + b dW"]);
    }

    #[test]
    fn stray_text_before_any_statement_is_its_own_piece() {
        let src = "+ 1\nparam a = 1\n";
        assert_eq!(texts(src), vec!["+ 1", "param a = 1"]);
    }

    #[test]
    fn a_lone_cr_ends_a_line_like_lf() {
        let src = "param a = 1 # speed\u{2028}x\rparam b = 2\r\nparam c = 3\r";
        assert_eq!(
            texts(src),
            vec!["param a = 1", "param b = 2", "param c = 3"]
        );
        let (_, comments) = split(src);
        assert_eq!(&src[comments[0].span.clone()], "# speed\u{2028}x");
    }

    #[test]
    fn comments_are_collected_with_their_position() {
        let src = "# header\nparam a = 1 # speed\n";
        let (_, comments) = split(src);
        assert_eq!(comments.len(), 2);
        assert!(!comments[0].trailing);
        assert!(comments[1].trailing);
        assert_eq!(&src[comments[1].span.clone()], "# speed");
    }
}
