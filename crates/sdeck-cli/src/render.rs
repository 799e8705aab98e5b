//! Rendering diagnostics for people (codespan-reporting) and for machines (JSON), and the
//! rule manual (`sdeck explain`, docs/rules.md).

use crate::check::Checked;
use codespan_reporting::diagnostic::{Diagnostic as Report, Label, Severity as ReportSeverity};
use codespan_reporting::files::SimpleFiles;
use codespan_reporting::term::{self, termcolor::WriteColor};
use sdeck_diagnostics::{rules, Diagnostic, Rule, Severity, Span};
use sdeck_syntax::{Encoding, LineIndex};
use serde_json::{json, Value};

/// A place in a file: 1-based (line, column) of the start and of the end.
pub type Place = ((u32, u32), (u32, u32));

/// 1-based (line, column) of a diagnostic's start and end; columns count characters.
/// Offsets past the text (which the analysis never gives) are clamped to its end.
pub fn position(text: &str, index: &LineIndex, d: &Diagnostic) -> Place {
    span_position(text, index, &d.span)
}

/// 1-based (line, column) of a byte span's start and end, as [`position`].
pub fn span_position(text: &str, index: &LineIndex, span: &Span) -> Place {
    let start = span.start.min(text.len());
    let end = span.end.clamp(start, text.len());
    let s = index.line_col(text, start, Encoding::Chars);
    let e = index.line_col(text, end, Encoding::Chars);
    ((s.line + 1, s.col + 1), (e.line + 1, e.col + 1))
}

/// The JSON report: `{"version": 1, "files": N, "diagnostics": [...]}`, sorted by file
/// then position. Each finding's object is built when it is written, so the report
/// streams: memory does not grow with the number of findings (a 4 MiB file of unused
/// parameters has 200,000).
pub fn json_report(checked: &[Checked]) -> impl serde::Serialize + '_ {
    let entries = checked.iter().flat_map(|c| {
        c.diagnostics
            .iter()
            .zip(&c.positions)
            .map(move |(d, (start, end))| {
                json!({
                    "file": c.source.path,
                    "rule": d.rule.name(),
                    "severity": d.severity.as_str(),
                    "message": d.message,
                    "range": {
                        "start": {"line": start.0, "column": start.1},
                        "end": {"line": end.0, "column": end.1},
                    }
                })
            })
    });
    #[derive(serde::Serialize)]
    #[serde(bound = "")]
    struct Report<I: Iterator<Item = Value>> {
        version: u32,
        files: usize,
        diagnostics: Streamed<I>,
    }
    Report {
        version: 1,
        files: checked.len(),
        diagnostics: Streamed::new(entries),
    }
}

/// A JSON array whose elements are made one at a time while it is written (serde
/// serialises through `&self`, hence the cell; the array can be written once).
pub struct Streamed<I>(std::cell::RefCell<Option<I>>);

impl<I> Streamed<I> {
    pub fn new(items: I) -> Streamed<I> {
        Streamed(std::cell::RefCell::new(Some(items)))
    }
}

impl<I: Iterator<Item = Value>> serde::Serialize for Streamed<I> {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        use serde::ser::{Error, SerializeSeq};
        let items = self
            .0
            .borrow_mut()
            .take()
            .ok_or_else(|| S::Error::custom("a streamed array is written once"))?;
        let mut seq = serializer.serialize_seq(None)?;
        for item in items {
            seq.serialize_element(&item)?;
        }
        seq.end()
    }
}

fn report_severity(s: Severity) -> ReportSeverity {
    match s {
        Severity::Hint => ReportSeverity::Help,
        Severity::Info => ReportSeverity::Note,
        Severity::Warning => ReportSeverity::Warning,
        Severity::Error => ReportSeverity::Error,
    }
}

/// The most findings shown with a snippet per line of a file; past it, one note says how
/// many more the line holds (each snippet reprints the line: 2,000 findings on one long
/// line would print megabytes).
pub const MAX_SNIPPETS_PER_LINE: usize = 3;

/// The longest line shown whole in a snippet, in characters. A finding on a longer line
/// shows an excerpt of it instead (a file of one 40,000-character line once printed the
/// whole line once per finding).
pub const MAX_SNIPPET_CHARS: usize = 200;

/// Characters of context shown on each side of a finding in an excerpt.
const EXCERPT_CONTEXT: usize = 40;

/// The most characters of the finding itself shown in an excerpt.
const EXCERPT_SPAN: usize = 80;

/// For a span on a line longer than [`MAX_SNIPPET_CHARS`]: `LINE:COLUMN (...)` and an
/// excerpt of the line around the span with carets under it; `None` for a shorter line.
fn excerpt(text: &str, index: &LineIndex, span: &Span) -> Option<String> {
    use sdeck_syntax::lines::{line_end, line_start};
    let start = span.start.min(text.len());
    let end = span.end.clamp(start, text.len());
    let (line_from, line_to) = (line_start(text, start), line_end(text, start));
    let line = text.get(line_from..line_to)?;
    let length = line.chars().count();
    if length <= MAX_SNIPPET_CHARS {
        return None;
    }
    let at = index.line_col(text, start, Encoding::Chars);
    let before: Vec<char> = text.get(line_from..start)?.chars().collect();
    let inside: Vec<char> = text.get(start..end.min(line_to))?.chars().collect();
    let after: Vec<char> = text.get(end.min(line_to)..line_to)?.chars().collect();
    let shown_before: String = before[before.len().saturating_sub(EXCERPT_CONTEXT)..]
        .iter()
        .collect();
    let shown_inside: String = inside.iter().take(EXCERPT_SPAN).collect();
    let shown_after: String = after.iter().take(EXCERPT_CONTEXT).collect();
    let lead = if before.len() > EXCERPT_CONTEXT {
        "…"
    } else {
        ""
    };
    let tail = if after.len() > EXCERPT_CONTEXT || inside.len() > EXCERPT_SPAN {
        "…"
    } else {
        ""
    };
    let pad = escape(&format!("{lead}{shown_before}")).chars().count();
    let carets = escape(&shown_inside).chars().count().max(1);
    Some(format!(
        "{}:{} (the line has {length} characters; an excerpt):\n{lead}{}{}{}{tail}\n{}{}",
        at.line + 1,
        at.col + 1,
        escape(&shown_before),
        escape(&shown_inside),
        escape(&shown_after),
        " ".repeat(pad),
        "^".repeat(carets),
    ))
}

/// Writes the diagnostics of one file for a person. Control characters of the file (an
/// ESC in a comment, a binary file) and of the messages are printed escaped (`\u{1b}`),
/// never raw, so no file can drive the terminal.
pub fn human(
    out: &mut dyn WriteColor,
    path: &str,
    text: &str,
    diagnostics: &[Diagnostic],
) -> std::io::Result<()> {
    let shown = Escaped::new(text);
    let mut files = SimpleFiles::new();
    let snippets = Snippets {
        id: files.add(escape(path), shown.text.as_str()),
        path,
        text,
        shown: &shown,
        index: LineIndex::new(text),
    };
    let config = term::Config::default();
    let mut on_line: std::collections::HashMap<u32, usize> = std::collections::HashMap::new();
    for d in diagnostics {
        let line = snippets.line_of(d);
        let count = on_line.entry(line).or_insert(0);
        *count += 1;
        if *count > MAX_SNIPPETS_PER_LINE {
            continue;
        }
        let report = snippets.report(d);
        emit_with_level_word(out, &config, &files, &report, d.severity)?;
    }
    crowded_lines(out, path, on_line)
}

/// What the snippets of one file are cut from: its text, and that text as printed.
struct Snippets<'a> {
    id: usize,
    path: &'a str,
    text: &'a str,
    shown: &'a Escaped,
    index: LineIndex,
}

impl Snippets<'_> {
    /// The 0-based line a diagnostic starts on.
    fn line_of(&self, d: &Diagnostic) -> u32 {
        let start = d.span.start.min(self.text.len());
        self.index.line_col(self.text, start, Encoding::Utf8).line
    }

    /// A byte span of the text as a span of the printed text (clamped to the text).
    fn clamp(&self, r: &std::ops::Range<usize>) -> std::ops::Range<usize> {
        let start = r.start.min(self.text.len());
        let end = r.end.clamp(start, self.text.len());
        self.shown.offset(start)..self.shown.offset(end)
    }

    /// One finding as a snippet report: its labels (or an excerpt, for a span too long
    /// to underline), its notes and help.
    fn report(&self, d: &Diagnostic) -> Report<usize> {
        let (id, path) = (self.id, self.path);
        let mut labels = Vec::new();
        let mut excerpts = Vec::new();
        match excerpt(self.text, &self.index, &d.span) {
            None => {
                let mut primary = Label::primary(id, self.clamp(&d.span));
                if let Some(label) = &d.label {
                    primary = primary.with_message(escape(label));
                }
                labels.push(primary);
            }
            Some(cut) => excerpts.push(format!("at {}:{cut}", escape(path))),
        }
        for r in &d.related {
            match excerpt(self.text, &self.index, &r.span) {
                None => labels.push(
                    Label::secondary(id, self.clamp(&r.span)).with_message(escape(&r.message)),
                ),
                Some(cut) => {
                    excerpts.push(format!("{}: {}:{cut}", escape(&r.message), escape(path)))
                }
            }
        }
        let mut notes: Vec<String> = excerpts;
        notes.extend(d.notes.iter().map(|n| escape(n)));
        if let Some(help) = &d.help {
            notes.push(format!("help: {}", escape(help)));
        }
        Report::new(report_severity(d.severity))
            .with_code(d.rule.name())
            .with_message(escape(&d.message))
            .with_labels(labels)
            .with_notes(notes)
    }
}

/// A note per line with more findings than [`MAX_SNIPPETS_PER_LINE`]: how many more.
fn crowded_lines(
    out: &mut dyn WriteColor,
    path: &str,
    on_line: std::collections::HashMap<u32, usize>,
) -> std::io::Result<()> {
    let mut crowded: Vec<(u32, usize)> = on_line
        .into_iter()
        .filter(|(_, n)| *n > MAX_SNIPPETS_PER_LINE)
        .collect();
    crowded.sort_unstable();
    for (line, n) in crowded {
        writeln!(
            out,
            "note: {}:{}: {} more finding{} on this line not shown (the counts below and \
             `--format json` include them)\n",
            escape(path),
            line + 1,
            n - MAX_SNIPPETS_PER_LINE,
            if n - MAX_SNIPPETS_PER_LINE == 1 {
                ""
            } else {
                "s"
            }
        )?;
    }
    Ok(())
}

/// Emits one report, its header word the level's own name (`hint`, `info`, `warning`,
/// `error`: the words of `sdeck.toml`, the JSON report and the summary line) rather than
/// the snippet printer's `help` and `note`.
fn emit_with_level_word(
    out: &mut dyn WriteColor,
    config: &term::Config,
    files: &SimpleFiles<String, &str>,
    report: &Report<usize>,
    severity: Severity,
) -> std::io::Result<()> {
    use codespan_reporting::term::termcolor::Buffer;
    let mut buffer = if out.supports_color() {
        Buffer::ansi()
    } else {
        Buffer::no_color()
    };
    term::emit(&mut buffer, config, files, report).map_err(std::io::Error::other)?;
    let mut bytes = buffer.into_inner();
    let printed = match report.severity {
        ReportSeverity::Help => "help[",
        ReportSeverity::Note => "note[",
        _ => "",
    };
    if !printed.is_empty() {
        // Only in the header, the first line: a snippet may show the same letters.
        let header_end = bytes
            .iter()
            .position(|b| *b == b'\n')
            .unwrap_or(bytes.len());
        if let Some(at) = bytes[..header_end]
            .windows(printed.len())
            .position(|w| w == printed.as_bytes())
        {
            let word = format!("{}[", severity.as_str());
            bytes.splice(at..at + printed.len(), word.bytes());
        }
    }
    out.write_all(&bytes)
}

/// `text` with every control character other than tab and line breaks written as
/// `\u{..}`.
pub fn escape(text: &str) -> String {
    Escaped::new(text).text
}

fn is_shown_raw(c: char) -> bool {
    !c.is_control() || c == '\n' || c == '\t' || c == '\r'
}

/// A text with its control characters escaped, and the way from offsets of the original
/// to offsets of the escaped text. A lone CR (a line break) becomes LF, the one break the
/// snippet printer knows.
struct Escaped {
    text: String,
    /// (offset in the original just after an escaped character, bytes added so far).
    shifts: Vec<(usize, usize)>,
}

impl Escaped {
    fn new(text: &str) -> Escaped {
        if text.chars().all(is_shown_raw) && !text.contains('\r') {
            return Escaped {
                text: text.to_string(),
                shifts: Vec::new(),
            };
        }
        let mut out = String::with_capacity(text.len());
        let mut shifts = Vec::new();
        let mut added = 0;
        let bytes = text.as_bytes();
        for (i, c) in text.char_indices() {
            if c == '\r' {
                out.push(if bytes.get(i + 1) == Some(&b'\n') {
                    '\r'
                } else {
                    '\n'
                });
            } else if is_shown_raw(c) {
                out.push(c);
            } else {
                let written = format!("\\u{{{:x}}}", c as u32);
                added += written.len() - c.len_utf8();
                out.push_str(&written);
                shifts.push((i + c.len_utf8(), added));
            }
        }
        Escaped { text: out, shifts }
    }

    /// Where an offset of the original text lies in the escaped one.
    fn offset(&self, offset: usize) -> usize {
        let before = self.shifts.partition_point(|(end, _)| *end <= offset);
        offset + before.checked_sub(1).map(|k| self.shifts[k].1).unwrap_or(0)
    }
}

/// The manual of one rule, as `sdeck explain RULE` prints it.
pub fn explain_text(rule: &Rule) -> String {
    let manual = sdeck_checks::manual(rule.id);
    let mut s = format!(
        "{} ({} by default)\n\n{}\n\n{}\n",
        rule.name,
        rule.default_severity.as_str(),
        rule.summary,
        manual.explanation.trim_end()
    );
    s.push_str("\n## Example\n\nFlawed:\n\n");
    for line in manual.flawed.lines() {
        s.push_str(&format!("    {line}\n"));
    }
    s.push_str("\nMended:\n\n");
    for line in manual.fixed.lines() {
        s.push_str(&format!("    {line}\n"));
    }
    s
}

/// The introduction of the rule manual, kept beside the other docs.
const RULES_INTRO: &str = include_str!("../../../docs/rules-intro.md");

/// The rule manual in Markdown, as docs/rules.md holds it (`sdeck explain --markdown`).
/// Generated from the rule catalogue, the same text that `sdeck explain RULE` prints.
pub fn rules_markdown() -> String {
    let mut s = String::from(
        "<!-- Generated by `sdeck explain --markdown > docs/rules.md`; edit the rule pages crates/sdeck-checks/src/rules/NAME.md instead. -->\n\n# Rules\n\n",
    );
    s.push_str(RULES_INTRO.trim());
    s.push_str("\n\n| rule | default severity | when |\n|---|---|---|\n");
    for rule in rules::ALL {
        s.push_str(&format!(
            "| [`{}`](#{}) | {} | {} |\n",
            rule.name,
            rule.name,
            rule.default_severity.as_str(),
            rule.summary.replace('|', "\\|")
        ));
    }
    for rule in rules::ALL {
        s.push('\n');
        s.push_str(&rule_markdown(rule));
    }
    s
}

/// One rule's section of the manual: a level-2 heading, the explanation with its own
/// headings one level down, the flawed and the fixed model.
pub fn rule_markdown(rule: &Rule) -> String {
    let manual = sdeck_checks::manual(rule.id);
    let mut s = format!(
        "## {}\n\nDefault severity: **{}**. {}\n\n",
        rule.name,
        rule.default_severity.as_str(),
        rule.summary
    );
    for line in manual.explanation.trim().lines() {
        if line.starts_with('#') {
            s.push('#');
        }
        s.push_str(line);
        s.push('\n');
    }
    s.push_str("\n### Example\n\nFlawed:\n\n```text\n");
    s.push_str(manual.flawed.trim_end());
    s.push_str("\n```\n\nMended:\n\n```text\n");
    s.push_str(manual.fixed.trim_end());
    s.push_str("\n```\n");
    s
}
