//! Rendering diagnostics for people (codespan-reporting) and for machines (JSON).

use codespan_reporting::diagnostic::{Diagnostic as Report, Label, Severity as ReportSeverity};
use codespan_reporting::files::SimpleFiles;
use codespan_reporting::term::{self, termcolor::WriteColor};
use sdeck_diagnostics::{Diagnostic, Rule, Severity};
use sdeck_syntax::{Encoding, LineIndex};
use serde_json::{json, Value};

/// A diagnostic placed in a file, with 1-based line/column (columns count characters).
pub struct Located<'a> {
    pub file: &'a str,
    pub diagnostic: &'a Diagnostic,
    pub start: (u32, u32),
    pub end: (u32, u32),
}

pub fn locate<'a>(file: &'a str, text: &str, index: &LineIndex, d: &'a Diagnostic) -> Located<'a> {
    let s = index.line_col(text, d.span.start, Encoding::Chars);
    let e = index.line_col(text, d.span.end, Encoding::Chars);
    Located {
        file,
        diagnostic: d,
        start: (s.line + 1, s.col + 1),
        end: (e.line + 1, e.col + 1),
    }
}

pub fn json_entry(l: &Located) -> Value {
    json!({
        "file": l.file,
        "rule": l.diagnostic.rule,
        "severity": l.diagnostic.severity.as_str(),
        "message": l.diagnostic.message,
        "range": {
            "start": {"line": l.start.0, "column": l.start.1},
            "end": {"line": l.end.0, "column": l.end.1},
        }
    })
}

fn report_severity(s: Severity) -> ReportSeverity {
    match s {
        Severity::Hint => ReportSeverity::Help,
        Severity::Info => ReportSeverity::Note,
        Severity::Warning => ReportSeverity::Warning,
        Severity::Error => ReportSeverity::Error,
    }
}

/// Writes the diagnostics of one file for a person.
pub fn human(
    out: &mut dyn WriteColor,
    path: &str,
    text: &str,
    diagnostics: &[Diagnostic],
) -> std::io::Result<()> {
    let mut files = SimpleFiles::new();
    let id = files.add(path, text);
    let config = term::Config::default();
    let clamp = |r: &std::ops::Range<usize>| {
        let start = r.start.min(text.len());
        let end = r.end.clamp(start, text.len());
        start..end
    };
    for d in diagnostics {
        let mut primary = Label::primary(id, clamp(&d.span));
        if let Some(label) = &d.label {
            primary = primary.with_message(label.clone());
        }
        let mut labels = vec![primary];
        for r in &d.related {
            labels.push(Label::secondary(id, clamp(&r.span)).with_message(r.message.clone()));
        }
        let mut notes: Vec<String> = d.notes.clone();
        if let Some(help) = &d.help {
            notes.push(format!("help: {help}"));
        }
        let report = Report::new(report_severity(d.severity))
            .with_code(d.rule)
            .with_message(d.message.clone())
            .with_labels(labels)
            .with_notes(notes);
        term::emit(out, &config, &files, &report).map_err(std::io::Error::other)?;
    }
    Ok(())
}

/// The manual of one rule, as `sdeck explain RULE` prints it.
pub fn explain_text(rule: &Rule) -> String {
    let mut s = format!(
        "{} ({} by default)\n\n{}\n\n{}\n",
        rule.name,
        rule.default_severity.as_str(),
        rule.summary,
        rule.explanation.trim_end()
    );
    s.push_str("\nA flawed model:\n\n");
    for line in rule.flawed.lines() {
        s.push_str(&format!("    {line}\n"));
    }
    s.push_str("\nThe same model, mended:\n\n");
    for line in rule.fixed.lines() {
        s.push_str(&format!("    {line}\n"));
    }
    s
}
