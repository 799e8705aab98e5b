//! The formatter of sdeck model files, shared by `sdeck fmt` and the language server.
//!
//! [`format`] prints every statement of a file in one canonical spacing, aligns the
//! columns of consecutive `param`/`factor` declarations and the trailing comments of a
//! block, keeps every comment, keeps at most one blank line between blocks, and is
//! idempotent. An equation over several lines keeps the author's breaks between its terms,
//! with its comments at the ends of its lines and continuation lines indented under its
//! first term. It never loses text: a file with syntax errors is returned unchanged
//! ([`Outcome::SyntaxErrors`]), any other statement with a comment inside it is kept as
//! written, and a result that would not read back to itself is refused.
//!
//! ```
//! let outcome = sdeck_format::format("param  k=2[1/year]>0 # speed\nfactor x=1\n");
//! assert_eq!(
//!     outcome,
//!     sdeck_format::Outcome::Formatted(
//!         "param  k = 2 [1/year] > 0  # speed\nfactor x = 1\n".to_string()
//!     )
//! );
//! ```

mod print;

use sdeck_syntax::ast::{Comment, SourceFile, Statement, StatementKind};

/// What the formatter made of a text.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Outcome {
    /// The formatted text (equal to the input when it was already formatted).
    Formatted(String),
    /// The text does not parse; it is left as it is. `count` syntax errors were found.
    SyntaxErrors { count: usize },
    /// The printed text would not read back to itself (a defect of the formatter); the
    /// input is left as it is rather than risk changing its meaning.
    Refused { reason: String },
}

impl Outcome {
    /// The text to keep: the formatted text, or `source` when nothing was formatted.
    pub fn text_or<'a>(&'a self, source: &'a str) -> &'a str {
        match self {
            Outcome::Formatted(text) => text,
            _ => source,
        }
    }
}

/// Formats a whole model file. The result uses the file's line break (the first one it
/// uses: LF, CRLF or CR) on every line.
pub fn format(source: &str) -> Outcome {
    let line_break = sdeck_syntax::lines::first_break(source);
    if !source.contains('\r') {
        return format_lf(source);
    }
    // Format with LF breaks, then write the file's own break back.
    match format_lf(&sdeck_syntax::lines::with_breaks(source, "\n")) {
        Outcome::Formatted(text) => {
            Outcome::Formatted(sdeck_syntax::lines::with_breaks(&text, line_break))
        }
        other => other,
    }
}

/// Formats a text whose only line break is LF.
fn format_lf(source: &str) -> Outcome {
    let file = sdeck_syntax::parse(source);
    if !file.diagnostics.is_empty() {
        return Outcome::SyntaxErrors {
            count: file.diagnostics.len(),
        };
    }
    let first = layout(source, &file);
    // The safety net: the printed text must parse cleanly, keep every comment, and print
    // to itself again. Anything else is a formatter defect; refuse rather than damage.
    let reparsed = sdeck_syntax::parse(&first);
    if !reparsed.diagnostics.is_empty() {
        return Outcome::Refused {
            reason: "the formatted text does not parse".to_string(),
        };
    }
    if comment_texts(&file.comments) != comment_texts(&reparsed.comments) {
        return Outcome::Refused {
            reason: "the formatted text would lose a comment".to_string(),
        };
    }
    if reparsed.statements.len() != file.statements.len() {
        return Outcome::Refused {
            reason: "the formatted text has a different number of statements".to_string(),
        };
    }
    let second = layout(&first, &reparsed);
    if second != first {
        return Outcome::Refused {
            reason: "the formatted text does not format to itself".to_string(),
        };
    }
    Outcome::Formatted(first)
}

fn comment_texts(comments: &[Comment]) -> Vec<&str> {
    comments.iter().map(|c| c.text.trim_end()).collect()
}

/// One line (or verbatim run of lines) of the output before alignment.
enum Item<'a> {
    /// A comment on a line of its own, printed as written (trailing spaces trimmed).
    Comment(&'a str),
    /// A statement printed canonically, with its trailing comment if any.
    Statement {
        printed: Printed,
        trailing: Option<&'a str>,
    },
    /// A statement kept exactly as written (it has a comment inside it).
    Verbatim(&'a str),
    /// An equation over several lines, printed canonically with the author's breaks
    /// between terms, each line with its trailing comment.
    Lines(Vec<(String, Option<&'a str>)>),
}

/// A printed statement: either one flat string or the columns of a declaration.
pub(crate) enum Printed {
    Flat(String),
    /// `keyword`, `name`, `= value`, `[unit]`, `bound` (unit and bound may be empty).
    Declaration([String; 5]),
}

/// The blocks of the output: runs of items without a blank line between them.
fn layout(source: &str, file: &SourceFile) -> String {
    // Group into blocks at blank lines.
    let mut blocks: Vec<Vec<Item>> = Vec::new();
    let mut current: Vec<Item> = Vec::new();
    let mut previous_end: Option<usize> = None;
    for (start, piece) in pieces(source, file) {
        if let Some(end) = previous_end {
            if has_blank_line(source, end, start) && !current.is_empty() {
                blocks.push(std::mem::take(&mut current));
            }
        }
        let (item, end) = match piece {
            Piece::Comment(comment) => (
                Item::Comment(text_of(source, comment.span.clone()).trim_end()),
                comment.span.end,
            ),
            Piece::Statement {
                statement,
                inner,
                trailing,
            } => statement_item(source, statement, &inner, trailing),
        };
        current.push(item);
        previous_end = Some(end);
    }
    if !current.is_empty() {
        blocks.push(current);
    }

    let mut out = String::new();
    for (bi, block) in blocks.iter().enumerate() {
        if bi > 0 {
            out.push('\n');
        }
        write_block(&mut out, block);
    }
    out
}

/// A statement with the comments inside it and its trailing comment, or a comment on a
/// line of its own.
enum Piece<'a> {
    Statement {
        statement: &'a Statement,
        inner: Vec<&'a Comment>,
        trailing: Option<&'a Comment>,
    },
    Comment(&'a Comment),
}

/// The statements, with the comments each holds, and the own-line comments, ordered by
/// position (each with its start).
fn pieces<'a>(source: &str, file: &'a SourceFile) -> Vec<(usize, Piece<'a>)> {
    let mut pieces: Vec<(usize, Piece)> = Vec::new();
    let mut used_comment = vec![false; file.comments.len()];
    for statement in &file.statements {
        let line_end = line_end(source, statement.span.end);
        let mut inner = Vec::new();
        let mut trailing = None;
        for (ci, comment) in file.comments.iter().enumerate() {
            if comment.span.start >= statement.span.start && comment.span.start < statement.span.end
            {
                inner.push(comment);
                used_comment[ci] = true;
            } else if comment.trailing
                && comment.span.start >= statement.span.end
                && comment.span.start <= line_end
                && trailing.is_none()
            {
                trailing = Some(comment);
                used_comment[ci] = true;
            }
        }
        let piece = Piece::Statement {
            statement,
            inner,
            trailing,
        };
        pieces.push((statement.span.start, piece));
    }
    for (ci, comment) in file.comments.iter().enumerate() {
        if !used_comment[ci] {
            pieces.push((comment.span.start, Piece::Comment(comment)));
        }
    }
    pieces.sort_by_key(|(start, _)| *start);
    pieces
}

/// A statement as an item of the output, and where it ends in the source: an equation
/// over several lines keeps its breaks, a statement with a comment inside is kept as
/// written, any other is printed canonically.
fn statement_item<'a>(
    source: &'a str,
    statement: &Statement,
    inner: &[&Comment],
    trailing: Option<&Comment>,
) -> (Item<'a>, usize) {
    let end = trailing.map(|c| c.span.end).unwrap_or(statement.span.end);
    let trailing_text = trailing.map(|c| text_of(source, c.span.clone()).trim_end());
    if let Some(lines) = equation_over_lines(source, statement, inner, trailing_text) {
        (Item::Lines(lines), end)
    } else if !inner.is_empty() {
        let stop = line_end(source, end);
        let text = text_of(source, statement.span.start..stop).trim_end();
        (Item::Verbatim(text), stop)
    } else {
        let item = Item::Statement {
            printed: print::statement(source, &statement.kind),
            trailing: trailing_text,
        };
        (item, end)
    }
}

/// An equation written over several lines whose every break falls between two of its
/// terms (or after `=`), with at most a trailing comment on each line: its lines printed
/// canonically with the author's breaks, each with its comment. `None` for anything else
/// (a statement on one line, a break inside a term, a comment on a line of its own), which
/// is then joined, or kept as written when it holds a comment.
fn equation_over_lines<'a>(
    source: &'a str,
    statement: &Statement,
    inner: &[&Comment],
    trailing: Option<&'a str>,
) -> Option<Vec<(String, Option<&'a str>)>> {
    let StatementKind::Equation(eq) = &statement.kind else {
        return None;
    };
    let span = statement.span.clone();
    let text = source.get(span.clone())?;
    let breaks: Vec<usize> = text
        .match_indices('\n')
        .map(|(i, _)| span.start + i)
        .collect();
    if breaks.is_empty() {
        return None;
    }
    // Each break must open the line of a term of its own: after the previous term ends,
    // before the next begins, and no two breaks before the same term (a line without one).
    let mut starts_line = vec![false; eq.terms.len()];
    for &b in &breaks {
        let k = eq.terms.iter().position(|t| t.span.start > b)?;
        if k > 0 && eq.terms.get(k - 1)?.span.end > b {
            return None;
        }
        if std::mem::replace(starts_line.get_mut(k)?, true) {
            return None;
        }
    }
    let mut comments: Vec<Option<&'a str>> = vec![None; breaks.len() + 1];
    for c in inner {
        if !c.trailing {
            return None;
        }
        let line = breaks.iter().filter(|&&b| b < c.span.start).count();
        let slot = comments.get_mut(line)?;
        if slot.is_some() {
            return None;
        }
        *slot = Some(text_of(source, c.span.clone()).trim_end());
    }
    if let (Some(last), Some(_)) = (comments.last_mut(), trailing) {
        if last.is_some() {
            return None;
        }
        *last = trailing;
    }
    let lines = print::equation_lines(source, eq, &starts_line);
    (lines.len() == comments.len()).then(|| lines.into_iter().zip(comments).collect())
}

/// Writes one block: declarations aligned by column, trailing comments aligned.
fn write_block(out: &mut String, block: &[Item]) {
    // Column widths over consecutive declarations (runs broken by any other item).
    let mut lines: Vec<(String, Option<&str>)> = Vec::new();
    let mut i = 0;
    while i < block.len() {
        let run_end = (i..block.len())
            .find(|&j| {
                !matches!(
                    block.get(j),
                    Some(Item::Statement {
                        printed: Printed::Declaration(_),
                        ..
                    })
                )
            })
            .unwrap_or(block.len());
        if run_end > i {
            let mut widths = [0usize; 5];
            for item in &block[i..run_end] {
                if let Item::Statement {
                    printed: Printed::Declaration(columns),
                    ..
                } = item
                {
                    for (w, c) in widths.iter_mut().zip(columns) {
                        *w = (*w).max(width(c));
                    }
                }
            }
            for item in &block[i..run_end] {
                if let Item::Statement {
                    printed: Printed::Declaration(columns),
                    trailing,
                } = item
                {
                    lines.push((join_columns(columns, &widths), *trailing));
                }
            }
            i = run_end;
            continue;
        }
        match &block[i] {
            Item::Comment(text) => lines.push((text.to_string(), None)),
            Item::Verbatim(text) => lines.push((text.to_string(), None)),
            Item::Lines(statement_lines) => {
                lines.extend(statement_lines.iter().map(|(code, c)| (code.clone(), *c)))
            }
            Item::Statement {
                printed: Printed::Flat(text),
                trailing,
            } => lines.push((text.clone(), *trailing)),
            Item::Statement {
                printed: Printed::Declaration(columns),
                trailing,
            } => lines.push((join_columns(columns, &[0; 5]), *trailing)),
        }
        i += 1;
    }
    let comment_column = lines
        .iter()
        .filter(|(_, trailing)| trailing.is_some())
        .map(|(code, _)| width(code))
        .max()
        .unwrap_or(0)
        + 2;
    for (code, trailing) in lines {
        out.push_str(&code);
        if let Some(comment) = trailing {
            let pad = comment_column.saturating_sub(width(&code));
            out.extend(std::iter::repeat_n(' ', pad));
            out.push_str(comment);
        }
        out.push('\n');
    }
}

/// Joins declaration columns, padding each to its width; empty trailing columns vanish.
fn join_columns(columns: &[String; 5], widths: &[usize; 5]) -> String {
    let last = columns.iter().rposition(|c| !c.is_empty()).unwrap_or(0);
    let mut line = String::new();
    for (k, (column, w)) in columns.iter().zip(widths).enumerate().take(last + 1) {
        if k > 0 {
            line.push(' ');
        }
        line.push_str(column);
        if k < last {
            line.extend(std::iter::repeat_n(' ', w.saturating_sub(width(column))));
        }
    }
    line
}

/// Display width in characters (names may be Greek; one character, one column).
fn width(text: &str) -> usize {
    text.chars().count()
}

fn text_of(source: &str, span: std::ops::Range<usize>) -> &str {
    source.get(span).unwrap_or("")
}

/// The offset of the end of the line holding `offset` (before the newline).
fn line_end(source: &str, offset: usize) -> usize {
    let offset = offset.min(source.len());
    source
        .get(offset..)
        .and_then(|rest| rest.find('\n'))
        .map(|i| offset + i)
        .unwrap_or(source.len())
}

/// Whether an empty line lies between `from` and `to`.
fn has_blank_line(source: &str, from: usize, to: usize) -> bool {
    let gap = source.get(from..to).unwrap_or("");
    gap.split('\n')
        .skip(1)
        .collect::<Vec<_>>()
        .split_last()
        .is_some_and(|(_, middle)| middle.iter().any(|line| line.trim().is_empty()))
}

#[cfg(test)]
mod tests;
