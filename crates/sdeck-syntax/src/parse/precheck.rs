//! The checks that run on a statement's text before pest sees it.

use super::{syntax_error, Result, MAX_NESTING, MAX_STATEMENT_BYTES};
use crate::split::{is_ident_char, RETIRED_KEYWORDS};
use sdeck_diagnostics::{Diagnostic, Span, TextEdit};

/// Two slips for an equation: `dr/dt = ...` (an ordinary differential equation's
/// notation) and `d r = ...` (a space inside the differential). Each is a `syntax` error
/// that gives the form `dr = DRIFT dt + VOL dW`, with a fix where the mend is mechanical.
pub(super) fn misshapen_equation(src: &str, offset: usize) -> Result<()> {
    let lead = src.len() - src.trim_start().len();
    let code = src.split('#').next().unwrap_or("").trim_end();
    let body = &code[lead..];
    let name_end = |text: &str| {
        text.char_indices()
            .find(|&(_, c)| !is_ident_char(c))
            .map(|(i, _)| i)
            .unwrap_or(text.len())
    };
    let Some(after_d) = body.strip_prefix('d') else {
        return Ok(());
    };
    let form = |name: &str| format!("an equation is written `d{name} = DRIFT dt + VOL dW`");
    // `d r = ...`
    let spaced = after_d.trim_start_matches([' ', '\t']);
    if spaced.len() < after_d.len() {
        let n = name_end(spaced);
        let name = &spaced[..n];
        if n > 0 && spaced[n..].trim_start().starts_with('=') {
            let gap = offset + lead + 1..offset + lead + 1 + (after_d.len() - spaced.len());
            return Err(syntax_error(
                offset + lead..offset + lead + 1 + (after_d.len() - spaced.len()) + n,
                format!(
                    "`d {name}` has a space inside the differential: {}",
                    form(name)
                ),
            )
            .with_help(format!("write `d{name}` without the space"))
            .with_fix(
                format!("Write `d{name}`"),
                vec![TextEdit {
                    span: gap,
                    new_text: String::new(),
                }],
            ));
        }
        return Ok(());
    }
    // `dr/dt = ...`
    let n = name_end(after_d);
    let name = &after_d[..n];
    let rest = after_d[n..].trim_start();
    let Some(over) = rest.strip_prefix('/') else {
        return Ok(());
    };
    let Some(after_dt) = over.trim_start().strip_prefix("dt") else {
        return Ok(());
    };
    let Some(rhs) = after_dt.trim_start().strip_prefix('=') else {
        return Ok(());
    };
    let lhs_end = code.len() - rhs.len();
    let mut error = syntax_error(
        offset + lead..offset + lhs_end - 1,
        format!(
            "`d{name}/dt = ...` is not how sdeck writes an equation: {}",
            form(name)
        ),
    )
    .with_help(format!(
        "the drift is the coefficient of `dt` and each shock gets its own term: `d{name} = kappa * (theta - {name}) dt + vol dW`"
    ));
    let drift = rhs.trim();
    if !drift.is_empty() {
        error = error.with_fix(
            format!("Write `d{name} = (...) dt`"),
            vec![TextEdit {
                span: offset + lead..offset + code.len(),
                new_text: format!("d{name} = ({drift}) dt"),
            }],
        );
    }
    Err(error)
}

/// When the statement starts with a keyword of the first version of the language
/// (`state`, `noise`): the `syntax` diagnostic naming the new word, with a fix that
/// rewrites it, the new word, and the statement with the new word in place.
pub(super) fn retired_keyword(
    src: &str,
    offset: usize,
) -> Option<(Diagnostic, &'static str, String)> {
    let word_len = src
        .char_indices()
        .find(|&(_, c)| !is_ident_char(c))
        .map_or(src.len(), |(i, _)| i);
    let word = &src[..word_len];
    let &(old, new) = RETIRED_KEYWORDS.iter().find(|(old, _)| *old == word)?;
    let rest = &src[word_len..];
    let first_line = rest.lines().next().unwrap_or("").trim();
    let example = if first_line.chars().count() <= 40 {
        format!("`{new} {first_line}`")
    } else {
        format!("`{new} ...`")
    };
    let diagnostic = syntax_error(
        offset..offset + word_len,
        format!("`{old}` is now `{new}`: write {example}"),
    )
    .with_help(
        "language v2 renamed two keywords: a factor is declared with `factor` (was `state`) \
         and a shock with `shock` (was `noise`); everything else about the statement stays",
    )
    .with_fix(
        format!("Write `{new}` for `{old}`"),
        vec![TextEdit {
            span: offset..offset + word_len,
            new_text: new.to_string(),
        }],
    );
    Some((diagnostic, new, format!("{new}{rest}")))
}

/// Size, bracket and nesting checks that run before pest.
pub(super) fn precheck(src: &str, offset: usize) -> Result<()> {
    let scan = scan_brackets(src, offset)?;
    check_length(src, offset, scan.code_bytes)?;
    check_all_closed(offset, &scan.open)
}

/// A bracket still open: the bracket, its offset in the statement, and whether it opens
/// an interval after `in`, which either closing bracket may end (`in [0, 1)`).
type OpenBracket = (char, usize, bool);

/// What the scan of a statement's text found: its bytes of code (comments aside) and
/// the brackets left open at its end.
struct Scan {
    code_bytes: usize,
    open: Vec<OpenBracket>,
}

/// Reads the statement once, matching brackets and bounding their nesting and the
/// number of `^`; the first misplaced bracket or excess is the error.
fn scan_brackets(src: &str, offset: usize) -> Result<Scan> {
    let mut code_bytes = 0usize;
    let mut stack: Vec<OpenBracket> = Vec::new();
    let mut in_comment = false;
    // `a ^ b ^ c` nests to the right in the grammar: bound it like brackets.
    let mut powers = 0usize;
    for (i, c) in src.char_indices() {
        if in_comment {
            in_comment = c != '\n' && c != '\r';
            continue;
        }
        code_bytes += c.len_utf8();
        let at = offset + i..offset + i + 1;
        match c {
            '#' => in_comment = true,
            '^' => {
                powers += 1;
                if powers > MAX_NESTING {
                    return Err(syntax_error(
                        at,
                        format!("more than {MAX_NESTING} `^` in one statement"),
                    )
                    .with_help("split the expression with `let` definitions"));
                }
            }
            '(' | '[' => {
                stack.push((c, i, opens_interval(&src[..i])));
                if stack.len() > MAX_NESTING {
                    return Err(syntax_error(
                        at,
                        format!("brackets nest deeper than {MAX_NESTING} levels"),
                    )
                    .with_help("split the expression with `let` definitions"));
                }
            }
            ')' | ']' => close_bracket(stack.pop(), c, at, offset)?,
            _ => {}
        }
    }
    Ok(Scan {
        code_bytes,
        open: stack,
    })
}

/// The closing bracket `c` at `at` against the bracket it closes, if any.
fn close_bracket(opened: Option<OpenBracket>, c: char, at: Span, offset: usize) -> Result<()> {
    match opened {
        Some((open, start, interval)) if !interval && matching(open) != c => Err(syntax_error(
            at,
            format!(
                "`{c}` does not close the `{open}` opened here; `{}` expected",
                matching(open)
            ),
        )
        .with_label(format!("`{}` expected", matching(open)))
        .with_related(
            offset + start..offset + start + 1,
            format!("`{open}` opened here"),
        )),
        Some(_) => Ok(()),
        None => Err(syntax_error(at, format!("`{c}` closes nothing"))
            .with_help("remove it, or add the opening bracket it was meant to close")),
    }
}

/// A statement longer than [`MAX_STATEMENT_BYTES`] of code, reported on its first
/// characters.
fn check_length(src: &str, offset: usize, code_bytes: usize) -> Result<()> {
    if code_bytes <= MAX_STATEMENT_BYTES {
        return Ok(());
    }
    let end = src
        .char_indices()
        .map(|(i, _)| i)
        .find(|&i| i >= 40)
        .unwrap_or(src.len());
    Err(syntax_error(
        offset..offset + end,
        format!(
            "this statement is {code_bytes} bytes long; statements of up to {MAX_STATEMENT_BYTES} bytes are read"
        ),
    )
    .with_help("a statement ends where the next line starts with a keyword or `dNAME =`"))
}

/// The innermost bracket left open at the end of the statement, if any.
fn check_all_closed(offset: usize, open: &[OpenBracket]) -> Result<()> {
    let Some(&(open, at, _)) = open.last() else {
        return Ok(());
    };
    let what = if open == '[' {
        "the unit or interval"
    } else {
        "the parenthesis"
    };
    Err(syntax_error(
        offset + at..offset + at + 1,
        format!("`{}` expected to close {what} opened here", matching(open)),
    )
    .with_label(format!("`{open}` opened here and never closed"))
    .with_help(format!(
        "add `{}` before the end of the statement",
        matching(open)
    )))
}

/// Whether the text before a bracket ends with the keyword `in`.
pub(super) fn opens_interval(before: &str) -> bool {
    let trimmed = before.trim_end();
    trimmed
        .strip_suffix("in")
        .is_some_and(|head| !head.chars().next_back().is_some_and(is_ident_char))
}

pub(super) fn matching(open: char) -> char {
    match open {
        '(' => ')',
        '[' => ']',
        _ => open,
    }
}
