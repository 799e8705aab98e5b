//! Suppression comments: `# sdeck: quiet RULE[, RULE] [-- reason]` and its range and file
//! forms.
//!
//! - After code on a line, `quiet` silences the rules on that statement's lines.
//! - Alone on a line, `quiet` silences them on the next statement (all its lines).
//! - `quiet-begin RULE` … `quiet-end RULE` silence a range of lines.
//! - `quiet-file RULE` silences the rules in the whole file.
//!
//! A suppression that silences nothing, or names no rule, is reported as
//! `unused-suppression`.

use sdeck_diagnostics::{rules, Diagnostic, Span};
use sdeck_syntax::ast::SourceFile;
use sdeck_syntax::LineIndex;

#[derive(Debug)]
struct Suppression {
    rules: Vec<String>,
    /// First and last line (zero-based, inclusive) it covers.
    lines: (u32, u32),
    comment: Span,
    used: Vec<bool>,
}

enum Directive {
    Quiet(Vec<String>),
    Begin(Vec<String>),
    End(Vec<String>),
    File(Vec<String>),
}

fn parse_directive(text: &str) -> Option<Result<Directive, String>> {
    let body = text.trim().strip_prefix("sdeck:")?.trim();
    let (word, rest) = body.split_once(char::is_whitespace).unwrap_or((body, ""));
    let rest = match rest.split_once("--") {
        Some((names, _reason)) => names,
        None => rest,
    };
    let names: Vec<String> = rest
        .split([',', ' ', '\t'])
        .map(str::trim)
        .filter(|s| !s.is_empty())
        .map(str::to_string)
        .collect();
    if names.is_empty() {
        return Some(Err(format!("`sdeck: {word}` names no rule")));
    }
    if let Some(unknown) = names.iter().find(|n| rules::by_name(n).is_none()) {
        return Some(Err(format!("`{unknown}` is not a rule")));
    }
    Some(match word {
        "quiet" => Ok(Directive::Quiet(names)),
        "quiet-begin" => Ok(Directive::Begin(names)),
        "quiet-end" => Ok(Directive::End(names)),
        "quiet-file" => Ok(Directive::File(names)),
        other => Err(format!(
            "`sdeck: {other}` is not a directive; write `quiet`, `quiet-begin`, `quiet-end` or `quiet-file`"
        )),
    })
}

/// Removes suppressed diagnostics and adds `unused-suppression` for the suppressions that
/// silenced nothing.
pub fn apply(source: &str, file: &SourceFile, diagnostics: Vec<Diagnostic>) -> Vec<Diagnostic> {
    let index = LineIndex::new(source);
    let line_of = |offset: usize| index.line_col(source, offset, sdeck_syntax::Encoding::Utf8).line;
    let statement_lines: Vec<(u32, u32)> = file
        .statements
        .iter()
        .map(|s| (line_of(s.span.start), line_of(s.span.end)))
        .collect();
    let mut problems = Vec::new();
    let mut suppressions: Vec<Suppression> = Vec::new();
    let mut open: Vec<(String, u32, Span)> = Vec::new();
    let last_line = index.line_count().saturating_sub(1) as u32;
    for comment in &file.comments {
        let Some(directive) = parse_directive(&comment.text) else { continue };
        let line = line_of(comment.span.start);
        let mut push = |rules: Vec<String>, lines: (u32, u32)| {
            let used = vec![false; rules.len()];
            suppressions.push(Suppression { rules, lines, comment: comment.span.clone(), used });
        };
        match directive {
            Err(message) => problems.push(
                Diagnostic::new(&rules::UNUSED_SUPPRESSION, comment.span.clone(), message)
                    .with_help("write `# sdeck: quiet RULE -- reason`; `sdeck explain` lists the rules"),
            ),
            Ok(Directive::Quiet(names)) => {
                let lines = if comment.trailing {
                    statement_lines
                        .iter()
                        .copied()
                        .find(|&(a, b)| a <= line && line <= b)
                        .unwrap_or((line, line))
                } else {
                    statement_lines
                        .iter()
                        .copied()
                        .find(|&(a, _)| a > line)
                        .unwrap_or((line + 1, line + 1))
                };
                push(names, lines);
            }
            Ok(Directive::File(names)) => push(names, (0, last_line)),
            Ok(Directive::Begin(names)) => {
                for n in names {
                    open.push((n, line, comment.span.clone()));
                }
            }
            Ok(Directive::End(names)) => {
                for n in names {
                    if let Some(pos) = open.iter().rposition(|(o, _, _)| *o == n) {
                        let (rule, start, span) = open.remove(pos);
                        suppressions.push(Suppression {
                            rules: vec![rule],
                            lines: (start, line),
                            comment: span,
                            used: vec![false],
                        });
                    } else {
                        problems.push(
                            Diagnostic::new(&rules::UNUSED_SUPPRESSION, comment.span.clone(), format!("`quiet-end {n}` closes no `quiet-begin {n}`"))
                                .with_help(format!("add `# sdeck: quiet-begin {n}` where the range starts, or remove this line")),
                        );
                    }
                }
            }
        }
    }
    // A range left open runs to the end of the file.
    for (rule, start, span) in open {
        suppressions.push(Suppression { rules: vec![rule], lines: (start, last_line), comment: span, used: vec![false] });
    }
    let mut kept = Vec::with_capacity(diagnostics.len());
    for d in diagnostics {
        let line = line_of(d.span.start);
        let mut silenced = false;
        for s in suppressions.iter_mut() {
            if s.lines.0 <= line && line <= s.lines.1 {
                if let Some(i) = s.rules.iter().position(|r| r == d.rule) {
                    s.used[i] = true;
                    silenced = true;
                }
            }
        }
        if !silenced {
            kept.push(d);
        }
    }
    for s in &suppressions {
        for (rule, used) in s.rules.iter().zip(&s.used) {
            if !used {
                kept.push(
                    Diagnostic::new(&rules::UNUSED_SUPPRESSION, s.comment.clone(), format!("this suppression of `{rule}` silences nothing"))
                        .with_help("remove it, or move it to the line where the rule fires"),
                );
            }
        }
    }
    kept.extend(problems);
    kept
}
