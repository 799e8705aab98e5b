//! Suppression comments: `# sdeck: quiet RULE[, RULE] [because REASON]` and its range and file
//! forms.
//!
//! - After code on a line, `quiet` silences the rules on that statement's lines.
//! - Alone on a line, `quiet` silences them on the next statement (all its lines).
//! - `quiet-begin RULE` … `quiet-end RULE` silence a range of lines.
//! - `quiet-file RULE` silences the rules in the whole file.
//!
//! Each rule name that silences nothing is reported as `unused-suppression`, at the name.
//! So is an unknown rule name (the known names beside it still work), a comment that names
//! no rule, and an unknown directive (`# sdeck: hush unused`). A reason written after
//! `--` (the first version's form) is reported too, with a fix that writes `because`; the
//! comment still silences its rules, so the old form gives one finding, not two.

use sdeck_diagnostics::{rules, Diagnostic, RuleId, Span, TextEdit};
use sdeck_syntax::ast::SourceFile;
use sdeck_syntax::LineIndex;

/// One rule named in a suppression comment, with where its name stands.
#[derive(Debug, Clone)]
struct NamedRule {
    rule: RuleId,
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
    /// For each misspelt rule name: its problem (index into `problems`) and the rule its
    /// fix would write.
    misspelt: Vec<(usize, RuleId)>,
}

fn problem(span: Span, message: String) -> Diagnostic {
    Diagnostic::new(&rules::UNUSED_SUPPRESSION, span, message)
        .with_help("write `# sdeck: quiet RULE because REASON`; `sdeck explain` lists the rules")
}

/// The byte offset in `text` of the first whole word equal to `word` (words are separated
/// by white space and commas).
fn word_offset(text: &str, word: &str) -> Option<usize> {
    let mut from = 0;
    while let Some(i) = text
        .get(from..)
        .and_then(|t| t.find(word))
        .map(|i| from + i)
    {
        let before = text.get(..i).and_then(|t| t.chars().next_back());
        let after = text.get(i + word.len()..).and_then(|t| t.chars().next());
        let apart = |c: Option<char>| c.is_none_or(|c| c.is_whitespace() || c == ',');
        if apart(before) && apart(after) {
            return Some(i);
        }
        from = i + word.len();
    }
    None
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
    let (directive_end, old_reason) = directive_end(text, after_prefix);
    let words = words_of(text, after_prefix, directive_end);
    let absolute = |offset: usize, word: &str| base + offset..base + offset + word.len();
    let Some(&(word_at, word)) = words.first() else {
        return Some(Directive::refused(problem(
            comment.clone(),
            "`sdeck:` names no directive and no rule".to_string(),
        )));
    };
    let kind = match word {
        "quiet" => Kind::Quiet,
        "quiet-begin" => Kind::Begin,
        "quiet-end" => Kind::End,
        "quiet-file" => Kind::File,
        other => {
            return Some(Directive::refused(problem(
                absolute(word_at, word),
                format!("`sdeck: {other}` is not a directive; write `quiet`, `quiet-begin`, `quiet-end` or `quiet-file`"),
            )))
        }
    };
    let names = words.get(1..).unwrap_or(&[]);
    if names.is_empty() {
        return Some(Directive::refused(problem(
            comment.clone(),
            format!("`sdeck: {word}` names no rule"),
        )));
    }
    let mut directive = Directive {
        kind: Some(kind),
        rules: Vec::new(),
        problems: Vec::new(),
        misspelt: Vec::new(),
    };
    if let Some(at) = old_reason {
        directive
            .problems
            .push(old_reason_problem(text, base, at, word));
    }
    for &(at, name) in names {
        directive.name_rule(name, absolute(at, name));
    }
    Some(directive)
}

/// Where the directive of a suppression comment ends (after `sdeck:` at `after_prefix`):
/// everything up to the word `because` is the directive, the rest is the reason. The first
/// version's `--` before the reason still ends the directive; its offset is returned
/// beside, to be reported.
fn directive_end(text: &str, after_prefix: usize) -> (usize, Option<usize>) {
    let rest = text.get(after_prefix..).unwrap_or("");
    let because = word_offset(rest, "because");
    let dashes = rest.find("--");
    match (because, dashes) {
        (Some(b), Some(d)) if d < b => (after_prefix + d, Some(after_prefix + d)),
        (Some(b), _) => (after_prefix + b, None),
        (None, Some(d)) => (after_prefix + d, Some(after_prefix + d)),
        (None, None) => (text.len(), None),
    }
}

/// The words of `text[from..to]`: maximal runs of characters other than white space and
/// commas, each with its offset in `text`.
fn words_of(text: &str, from: usize, to: usize) -> Vec<(usize, &str)> {
    let mut words = Vec::new();
    let directive = text.get(from..to).unwrap_or("");
    let mut start: Option<usize> = None;
    for (i, ch) in directive
        .char_indices()
        .chain(std::iter::once((directive.len(), ' ')))
    {
        let separator = ch.is_whitespace() || ch == ',';
        match (start, separator) {
            (None, false) => start = Some(i),
            (Some(s), true) => {
                words.push((from + s, directive.get(s..i).unwrap_or("")));
                start = None;
            }
            _ => {}
        }
    }
    words
}

/// A reason written after `--` (offset `at` in the comment's text), with the fix that
/// writes `because`.
fn old_reason_problem(text: &str, base: usize, at: usize, directive: &str) -> Diagnostic {
    let span = base + at..base + at + 2;
    let after = text.get(at + 2..).unwrap_or("");
    let new_text = if after.starts_with(char::is_whitespace) || after.is_empty() {
        "because"
    } else {
        "because "
    };
    Diagnostic::new(
        &rules::UNUSED_SUPPRESSION,
        span.clone(),
        "the reason of a suppression now follows the word `because`, not `--`",
    )
    .with_help(format!(
        "write `# sdeck: {directive} RULE because REASON`; the comment still silences its rules"
    ))
    .with_fix(
        "Write `because` for `--`",
        vec![TextEdit {
            span,
            new_text: new_text.to_string(),
        }],
    )
}

impl Directive {
    /// A comment that silences nothing, for `problem`.
    fn refused(problem: Diagnostic) -> Directive {
        Directive {
            kind: None,
            rules: Vec::new(),
            problems: vec![problem],
            misspelt: Vec::new(),
        }
    }

    /// Adds the rule `name` (at `span`), or the problem of a name that is no rule, with
    /// the fix that writes the closest rule's name.
    fn name_rule(&mut self, name: &str, span: Span) {
        if let Some(rule) = rules::by_name(name) {
            self.rules.push(NamedRule {
                rule: rule.id,
                span,
            });
            return;
        }
        let Some(close) = rules::closest(name) else {
            self.problems
                .push(problem(span, format!("`{name}` is not a rule")));
            return;
        };
        self.misspelt.push((self.problems.len(), close.id));
        self.problems.push(
            Diagnostic::new(
                &rules::UNUSED_SUPPRESSION,
                span.clone(),
                format!("`{name}` is not a rule; did you mean `{}`?", close.name),
            )
            .with_help(format!(
                "write `{}`; `sdeck explain` lists the rules",
                close.name
            ))
            .with_fix(
                format!("Write `{}`", close.name),
                vec![TextEdit {
                    span,
                    new_text: close.name.to_string(),
                }],
            ),
        );
    }
}

/// The lines of a source: zero-based line numbers of byte offsets.
struct Lines<'a> {
    source: &'a str,
    index: LineIndex,
}

impl Lines<'_> {
    fn of(&self, offset: usize) -> u32 {
        self.index
            .line_col(self.source, offset, sdeck_syntax::Encoding::Utf8)
            .line
    }

    fn last(&self) -> u32 {
        self.index.line_count().saturating_sub(1) as u32
    }
}

/// Removes suppressed diagnostics and adds `unused-suppression` for the suppressions that
/// silenced nothing, and for suppression comments that cannot be understood.
pub fn apply(source: &str, file: &SourceFile, diagnostics: Vec<Diagnostic>) -> Vec<Diagnostic> {
    let lines = Lines {
        source,
        index: LineIndex::new(source),
    };
    let (mut suppressions, problems) = read_suppressions(&lines, file, &diagnostics);
    let mut kept = silence(&lines, &mut suppressions, diagnostics);
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

/// Every suppression the comments of `file` make, with the lines each covers, and the
/// problems of the comments that cannot be understood. `diagnostics` decide whether a
/// misspelt rule name gets its fix.
fn read_suppressions(
    lines: &Lines,
    file: &SourceFile,
    diagnostics: &[Diagnostic],
) -> (Vec<Suppression>, Vec<Diagnostic>) {
    let statement_lines: Vec<(u32, u32)> = file
        .statements
        .iter()
        .map(|s| {
            // The last byte of the statement decides its last line: a span that ends
            // just after a line break must not reach into the next line.
            let last = s.span.end.saturating_sub(1).max(s.span.start);
            (lines.of(s.span.start), lines.of(last))
        })
        .collect();
    let finding_lines = FindingLines::new(diagnostics, lines);
    let mut problems = Vec::new();
    let mut suppressions: Vec<Suppression> = Vec::new();
    let mut open: Vec<(NamedRule, u32)> = Vec::new();
    for comment in &file.comments {
        // The comment's text follows its `#`; find where it starts in the source.
        let base = comment
            .span
            .end
            .checked_sub(comment.text.len())
            .filter(|b| *b >= comment.span.start)
            .unwrap_or(comment.span.start + 1);
        let Some(mut directive) = parse_directive(&comment.text, base, &comment.span) else {
            continue;
        };
        let line = lines.of(comment.span.start);
        let covered = match directive.kind {
            Some(Kind::Quiet) => quiet_lines(&statement_lines, line, comment.trailing),
            _ => (0, lines.last()),
        };
        keep_useful_fixes(&mut directive, covered, &finding_lines);
        problems.extend(directive.problems);
        let Some(kind) = directive.kind else { continue };
        match kind {
            Kind::Quiet | Kind::File if !directive.rules.is_empty() => {
                let used = vec![false; directive.rules.len()];
                suppressions.push(Suppression {
                    rules: directive.rules,
                    lines: covered,
                    used,
                });
            }
            Kind::Quiet | Kind::File => {}
            Kind::Begin => open.extend(directive.rules.into_iter().map(|named| (named, line))),
            Kind::End => {
                for named in directive.rules {
                    match open.iter().rposition(|(o, _)| o.rule == named.rule) {
                        Some(pos) => {
                            let (begin, start) = open.remove(pos);
                            suppressions.push(Suppression::one(begin, (start, line)));
                        }
                        None => problems.push(unopened_end(named)),
                    }
                }
            }
        }
    }
    // A range left open runs to the end of the file.
    for (named, start) in open {
        suppressions.push(Suppression::one(named, (start, lines.last())));
    }
    (suppressions, problems)
}

/// A misspelt name is mended only where the rule it means would silence something (on
/// the `covered` lines): elsewhere the mended comment would still silence nothing.
fn keep_useful_fixes(directive: &mut Directive, covered: (u32, u32), fired: &FindingLines) {
    if !matches!(directive.kind, Some(Kind::Quiet | Kind::File)) {
        return;
    }
    for &(k, meant) in &directive.misspelt {
        if let (false, Some(problem)) = (
            fired.fires_within(meant, covered),
            directive.problems.get_mut(k),
        ) {
            problem.fixes.clear();
        }
    }
}

/// The lines a `quiet` comment on `line` covers: those of the statement it ends (after
/// code) or of the next statement (alone on its line). `statement_lines` is in file
/// order, so both are found by binary search.
fn quiet_lines(statement_lines: &[(u32, u32)], line: u32, trailing: bool) -> (u32, u32) {
    if trailing {
        let first_reaching = statement_lines.partition_point(|&(_, last)| last < line);
        statement_lines
            .get(first_reaching)
            .copied()
            .filter(|&(first, _)| first <= line)
            .unwrap_or((line, line))
    } else {
        let next = statement_lines.partition_point(|&(first, _)| first <= line);
        statement_lines
            .get(next)
            .copied()
            .unwrap_or((line + 1, line + 1))
    }
}

/// The lines each rule fires on, sorted: whether a rule fires within a range is a binary
/// search, not a pass over every finding.
struct FindingLines(std::collections::HashMap<RuleId, Vec<u32>>);

impl FindingLines {
    fn new(diagnostics: &[Diagnostic], lines: &Lines) -> FindingLines {
        let mut by_rule: std::collections::HashMap<RuleId, Vec<u32>> = Default::default();
        for d in diagnostics {
            by_rule
                .entry(d.rule)
                .or_default()
                .push(lines.of(d.span.start));
        }
        for fired in by_rule.values_mut() {
            fired.sort_unstable();
        }
        FindingLines(by_rule)
    }

    fn fires_within(&self, rule: RuleId, (first, last): (u32, u32)) -> bool {
        self.0.get(&rule).is_some_and(|fired| {
            let from = fired.partition_point(|&l| l < first);
            fired.get(from).is_some_and(|&l| l <= last)
        })
    }
}

/// `quiet-end RULE` without a `quiet-begin RULE` before it.
fn unopened_end(named: NamedRule) -> Diagnostic {
    let name = named.rule;
    Diagnostic::new(
        &rules::UNUSED_SUPPRESSION,
        named.span,
        format!("`quiet-end {name}` closes no `quiet-begin {name}`"),
    )
    .with_help(format!(
        "add `# sdeck: quiet-begin {name}` where the range starts, or remove this line"
    ))
}

impl Suppression {
    /// One rule over `lines`.
    fn one(rule: NamedRule, lines: (u32, u32)) -> Suppression {
        Suppression {
            rules: vec![rule],
            lines,
            used: vec![false],
        }
    }
}

/// The diagnostics no suppression covers, in their order; each rule of a suppression
/// that silences one is marked used. One sweep over the lines: a finding is silenced when
/// a suppression of its rule is open on its line, and a suppression's rule is used when a
/// finding of that rule arrives while it is open. The cost is the findings plus the
/// suppressions (sorted), whatever their overlap: a file of 20,000 `quiet` comments once
/// took time in their product.
fn silence(
    lines: &Lines,
    suppressions: &mut [Suppression],
    mut diagnostics: Vec<Diagnostic>,
) -> Vec<Diagnostic> {
    // At one line: suppressions open, then findings arrive, then suppressions close.
    enum Event {
        Open { suppression: usize, rule: usize },
        Finding(usize),
        Close { suppression: usize, rule: usize },
    }
    if suppressions.is_empty() {
        return diagnostics;
    }
    let rules: usize = suppressions.iter().map(|s| s.rules.len()).sum();
    let mut events: Vec<(u32, u8, Event)> = Vec::with_capacity(2 * rules + diagnostics.len());
    for (i, s) in suppressions.iter().enumerate() {
        for rule in 0..s.rules.len() {
            let (open, close) = (
                Event::Open {
                    suppression: i,
                    rule,
                },
                Event::Close {
                    suppression: i,
                    rule,
                },
            );
            events.push((s.lines.0, 0, open));
            events.push((s.lines.1, 2, close));
        }
    }
    for (i, d) in diagnostics.iter().enumerate() {
        events.push((lines.of(d.span.start), 1, Event::Finding(i)));
    }
    // Unstable (no buffer): events of one line and phase commute.
    events.sort_unstable_by_key(|(line, phase, _)| (*line, *phase));
    // Per rule: how many suppressions of it are open, and how many findings of it have
    // arrived; per rule of each suppression, that count when it opened.
    let mut state: std::collections::HashMap<RuleId, (usize, usize)> = Default::default();
    let mut seen_at_open: Vec<Vec<usize>> = suppressions
        .iter()
        .map(|s| vec![0; s.rules.len()])
        .collect();
    let mut silenced = vec![false; diagnostics.len()];
    for (_, _, event) in events {
        match event {
            Event::Open { suppression, rule } => {
                let named = suppressions[suppression].rules[rule].rule;
                let (open, seen) = state.entry(named).or_default();
                *open += 1;
                seen_at_open[suppression][rule] = *seen;
            }
            Event::Finding(i) => {
                let (open, seen) = state.entry(diagnostics[i].rule).or_default();
                *seen += 1;
                silenced[i] = *open > 0;
            }
            Event::Close { suppression, rule } => {
                let s = &mut suppressions[suppression];
                let (open, seen) = state.entry(s.rules[rule].rule).or_default();
                *open = open.saturating_sub(1);
                if *seen > seen_at_open[suppression][rule] {
                    s.used[rule] = true;
                }
            }
        }
    }
    // In place: a file can hold 200,000 findings.
    let mut silenced = silenced.into_iter();
    diagnostics.retain(|_| !silenced.next().unwrap_or(false));
    diagnostics
}
