//! Suppression comments: `# sdeck: quiet RULE[, RULE] [-- reason]` and its range and file
//! forms.
//!
//! - After code on a line, `quiet` silences the rules on that statement's lines.
//! - Alone on a line, `quiet` silences them on the next statement (all its lines).
//! - `quiet-begin RULE` … `quiet-end RULE` silence a range of lines.
//! - `quiet-file RULE` silences the rules in the whole file.
//!
//! Each rule name that silences nothing is reported as `unused-suppression`, at the name.
//! So is an unknown rule name (the known names beside it still work), a comment that names
//! no rule, and an unknown directive (`# sdeck: hush unused`).

use sdeck_diagnostics::{rules, Diagnostic, Span};
use sdeck_syntax::ast::SourceFile;
use sdeck_syntax::LineIndex;

/// One rule named in a suppression comment, with where its name stands.
#[derive(Debug, Clone)]
struct NamedRule {
    rule: String,
    /// The bytes of the name in the source: unused-suppression is reported there.
    span: Span,
}

#[derive(Debug)]
struct Suppression {
    rules: Vec<NamedRule>,
    /// First and last line (zero-based, inclusive) it covers.
    lines: (u32, u32),
    used: Vec<bool>,
}

enum Kind {
    Quiet,
    Begin,
    End,
    File,
}

/// A parsed suppression comment: its kind and known rules, plus the problems found in it
/// (an unknown directive, no rule named, unknown rule names).
struct Directive {
    kind: Option<Kind>,
    rules: Vec<NamedRule>,
    problems: Vec<Diagnostic>,
}

fn problem(span: Span, message: String) -> Diagnostic {
    Diagnostic::new(&rules::UNUSED_SUPPRESSION, span, message)
        .with_help("write `# sdeck: quiet RULE -- reason`; `sdeck explain` lists the rules")
}

/// Parses the text of a comment (after `#`) whose first byte is at `base` in the source.
/// `None` when the comment is not a suppression (does not start with `sdeck:`).
fn parse_directive(text: &str, base: usize, comment: &Span) -> Option<Directive> {
    let lead = text.len() - text.trim_start().len();
    let after_prefix = lead
        + text
            .get(lead..)?
            .strip_prefix("sdeck:")
            .map(|_| "sdeck:".len())?;
    // Everything up to `--` is the directive; the rest is the reason.
    let directive_end = text
        .get(after_prefix..)
        .and_then(|rest| rest.find("--"))
        .map(|i| after_prefix + i)
        .unwrap_or(text.len());
    // Words: maximal runs of characters other than white space and commas, with offsets.
    let mut words: Vec<(usize, &str)> = Vec::new();
    let directive = text.get(after_prefix..directive_end).unwrap_or("");
    let mut start: Option<usize> = None;
    for (i, ch) in directive
        .char_indices()
        .chain(std::iter::once((directive.len(), ' ')))
    {
        let separator = ch.is_whitespace() || ch == ',';
        match (start, separator) {
            (None, false) => start = Some(i),
            (Some(s), true) => {
                words.push((after_prefix + s, directive.get(s..i).unwrap_or("")));
                start = None;
            }
            _ => {}
        }
    }
    let absolute = |offset: usize, word: &str| base + offset..base + offset + word.len();
    let Some(&(word_at, word)) = words.first() else {
        return Some(Directive {
            kind: None,
            rules: Vec::new(),
            problems: vec![problem(
                comment.clone(),
                "`sdeck:` names no directive and no rule".to_string(),
            )],
        });
    };
    let kind = match word {
        "quiet" => Kind::Quiet,
        "quiet-begin" => Kind::Begin,
        "quiet-end" => Kind::End,
        "quiet-file" => Kind::File,
        other => {
            return Some(Directive {
                kind: None,
                rules: Vec::new(),
                problems: vec![problem(
                    absolute(word_at, word),
                    format!("`sdeck: {other}` is not a directive; write `quiet`, `quiet-begin`, `quiet-end` or `quiet-file`"),
                )],
            })
        }
    };
    let names = words.get(1..).unwrap_or(&[]);
    if names.is_empty() {
        return Some(Directive {
            kind: None,
            rules: Vec::new(),
            problems: vec![problem(
                comment.clone(),
                format!("`sdeck: {word}` names no rule"),
            )],
        });
    }
    let mut known = Vec::new();
    let mut problems = Vec::new();
    for &(at, name) in names {
        let span = absolute(at, name);
        if rules::by_name(name).is_some() {
            known.push(NamedRule {
                rule: name.to_string(),
                span,
            });
        } else {
            problems.push(problem(span, format!("`{name}` is not a rule")));
        }
    }
    Some(Directive {
        kind: Some(kind),
        rules: known,
        problems,
    })
}

/// Removes suppressed diagnostics and adds `unused-suppression` for the suppressions that
/// silenced nothing, and for suppression comments that cannot be understood.
pub fn apply(source: &str, file: &SourceFile, diagnostics: Vec<Diagnostic>) -> Vec<Diagnostic> {
    let index = LineIndex::new(source);
    let line_of = |offset: usize| {
        index
            .line_col(source, offset, sdeck_syntax::Encoding::Utf8)
            .line
    };
    let statement_lines: Vec<(u32, u32)> = file
        .statements
        .iter()
        .map(|s| {
            // The last byte of the statement decides its last line: a span that ends
            // just after a line break must not reach into the next line.
            let last = s.span.end.saturating_sub(1).max(s.span.start);
            (line_of(s.span.start), line_of(last))
        })
        .collect();
    let mut problems = Vec::new();
    let mut suppressions: Vec<Suppression> = Vec::new();
    let mut open: Vec<(NamedRule, u32)> = Vec::new();
    let last_line = index.line_count().saturating_sub(1) as u32;
    for comment in &file.comments {
        // The comment's text follows its `#`; find where it starts in the source.
        let base = comment
            .span
            .end
            .checked_sub(comment.text.len())
            .filter(|b| *b >= comment.span.start)
            .unwrap_or(comment.span.start + 1);
        let Some(directive) = parse_directive(&comment.text, base, &comment.span) else {
            continue;
        };
        problems.extend(directive.problems);
        let Some(kind) = directive.kind else { continue };
        if directive.rules.is_empty() {
            continue;
        }
        let line = line_of(comment.span.start);
        let mut push = |rules: Vec<NamedRule>, lines: (u32, u32)| {
            let used = vec![false; rules.len()];
            suppressions.push(Suppression { rules, lines, used });
        };
        match kind {
            Kind::Quiet => {
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
                push(directive.rules, lines);
            }
            Kind::File => push(directive.rules, (0, last_line)),
            Kind::Begin => {
                for named in directive.rules {
                    open.push((named, line));
                }
            }
            Kind::End => {
                for named in directive.rules {
                    if let Some(pos) = open.iter().rposition(|(o, _)| o.rule == named.rule) {
                        let (begin, start) = open.remove(pos);
                        suppressions.push(Suppression {
                            rules: vec![begin],
                            lines: (start, line),
                            used: vec![false],
                        });
                    } else {
                        let name = named.rule;
                        problems.push(
                            Diagnostic::new(
                                &rules::UNUSED_SUPPRESSION,
                                named.span,
                                format!("`quiet-end {name}` closes no `quiet-begin {name}`"),
                            )
                            .with_help(format!(
                                "add `# sdeck: quiet-begin {name}` where the range starts, or remove this line"
                            )),
                        );
                    }
                }
            }
        }
    }
    // A range left open runs to the end of the file.
    for (named, start) in open {
        suppressions.push(Suppression {
            rules: vec![named],
            lines: (start, last_line),
            used: vec![false],
        });
    }
    let mut kept = Vec::with_capacity(diagnostics.len());
    for d in diagnostics {
        let line = line_of(d.span.start);
        let mut silenced = false;
        for s in suppressions.iter_mut() {
            if s.lines.0 <= line && line <= s.lines.1 {
                if let Some(i) = s.rules.iter().position(|r| r.rule == d.rule) {
                    if let Some(used) = s.used.get_mut(i) {
                        *used = true;
                    }
                    silenced = true;
                }
            }
        }
        if !silenced {
            kept.push(d);
        }
    }
    for s in &suppressions {
        for (named, used) in s.rules.iter().zip(&s.used) {
            if !used {
                kept.push(
                    Diagnostic::new(
                        &rules::UNUSED_SUPPRESSION,
                        named.span.clone(),
                        format!("this suppression of `{}` silences nothing", named.rule),
                    )
                    .with_help("remove it, or move it to the line where the rule fires"),
                );
            }
        }
    }
    kept.extend(problems);
    kept
}
