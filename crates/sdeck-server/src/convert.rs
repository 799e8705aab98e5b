//! The one place where byte offsets become protocol positions and back, and where
//! sdeck's diagnostics and edits become protocol types.

use crate::documents::PositionEncoding;
use sdeck_diagnostics::{Diagnostic, Severity, Span, TextEdit};
use sdeck_syntax::{LineCol, LineIndex};
use tower_lsp::lsp_types::{
    self as lsp, DiagnosticRelatedInformation, DiagnosticSeverity, Location, NumberOrString,
    Position, Range, Url,
};

/// Converts between byte offsets of one text and protocol positions.
#[derive(Clone, Copy)]
pub struct Converter<'a> {
    pub text: &'a str,
    pub index: &'a LineIndex,
    pub encoding: PositionEncoding,
}

impl<'a> Converter<'a> {
    pub fn position(&self, offset: usize) -> Position {
        let lc = self
            .index
            .line_col(self.text, offset, self.encoding.syntax());
        Position {
            line: lc.line,
            character: lc.col,
        }
    }

    pub fn range(&self, span: &Span) -> Range {
        Range {
            start: self.position(span.start),
            end: self.position(span.end.max(span.start)),
        }
    }

    pub fn offset(&self, position: Position) -> usize {
        self.index.offset(
            self.text,
            LineCol {
                line: position.line,
                col: position.character,
            },
            self.encoding.syntax(),
        )
    }

    /// The byte span of a protocol range (ends before starts are swapped).
    pub fn span(&self, range: Range) -> Span {
        let a = self.offset(range.start);
        let b = self.offset(range.end);
        a.min(b)..a.max(b)
    }

    /// The protocol form of a diagnostic: the rule as its code, help and notes under the
    /// message (as `sdeck check` prints them), labels as related information.
    pub fn diagnostic(&self, uri: &Url, d: &Diagnostic) -> lsp::Diagnostic {
        let mut message = d.message.clone();
        if let Some(help) = &d.help {
            message.push_str("\nhelp: ");
            message.push_str(help);
        }
        for note in &d.notes {
            message.push_str("\nnote: ");
            message.push_str(note);
        }
        let related: Vec<DiagnosticRelatedInformation> = d
            .related
            .iter()
            .map(|label| DiagnosticRelatedInformation {
                location: Location {
                    uri: uri.clone(),
                    range: self.range(&label.span),
                },
                message: label.message.clone(),
            })
            .collect();
        lsp::Diagnostic {
            range: self.range(&d.span),
            severity: Some(severity(d.severity)),
            code: Some(NumberOrString::String(d.rule.name().to_string())),
            code_description: None,
            source: Some("sdeck".to_string()),
            message,
            related_information: if related.is_empty() {
                None
            } else {
                Some(related)
            },
            tags: None,
            data: None,
        }
    }

    pub fn edits(&self, edits: &[TextEdit]) -> Vec<lsp::TextEdit> {
        edits
            .iter()
            .map(|e| lsp::TextEdit {
                range: self.range(&e.span),
                new_text: e.new_text.clone(),
            })
            .collect()
    }

    /// Whether a byte span meets a protocol range (touching counts).
    pub fn meets(&self, span: &Span, range: Range) -> bool {
        let wanted = self.span(range);
        span.start <= wanted.end && wanted.start <= span.end
    }
}

pub fn severity(severity: Severity) -> DiagnosticSeverity {
    match severity {
        Severity::Error => DiagnosticSeverity::ERROR,
        Severity::Warning => DiagnosticSeverity::WARNING,
        Severity::Info => DiagnosticSeverity::INFORMATION,
        Severity::Hint => DiagnosticSeverity::HINT,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spans_round_trip_through_utf16_and_utf8_positions() {
        let text = "# 🚀 note\nparam κ = 1\n";
        let index = LineIndex::new(text);
        let kappa = text.find('κ').unwrap_or(0);
        for (encoding, col) in [(PositionEncoding::Utf16, 6), (PositionEncoding::Utf8, 6)] {
            let c = Converter {
                text,
                index: &index,
                encoding,
            };
            let p = c.position(kappa);
            assert_eq!(
                p,
                Position {
                    line: 1,
                    character: col
                }
            );
            assert_eq!(c.offset(p), kappa);
        }
        // On the emoji line the encodings differ: after "# 🚀" is 4 UTF-16 units, 6 bytes.
        let space = text.find(" note").unwrap_or(0);
        let utf16 = Converter {
            text,
            index: &index,
            encoding: PositionEncoding::Utf16,
        };
        let utf8 = Converter {
            text,
            index: &index,
            encoding: PositionEncoding::Utf8,
        };
        assert_eq!(utf16.position(space).character, 4);
        assert_eq!(utf8.position(space).character, 6);
    }

    #[test]
    fn a_diagnostic_carries_rule_help_notes_and_related_places() {
        let text = "param a = 1\nparam a = 2\n";
        let index = LineIndex::new(text);
        let c = Converter {
            text,
            index: &index,
            encoding: PositionEncoding::Utf16,
        };
        let d = Diagnostic::new(
            &sdeck_diagnostics::rules::DUPLICATE_NAME,
            18..19,
            "`a` is declared twice",
        )
        .with_related(6..7, "first declared here")
        .with_help("rename one of them")
        .with_note("names are unique across all kinds");
        let uri = Url::parse("file:///m.sde").expect("a valid URI");
        let out = c.diagnostic(&uri, &d);
        assert_eq!(
            out.code,
            Some(NumberOrString::String("duplicate-name".into()))
        );
        assert_eq!(out.severity, Some(DiagnosticSeverity::ERROR));
        assert_eq!(
            out.range.start,
            Position {
                line: 1,
                character: 6
            }
        );
        assert!(out.message.contains("help: rename one of them"));
        assert!(out.message.contains("note: names are unique"));
        let related = out.related_information.unwrap_or_default();
        assert_eq!(related.len(), 1);
        assert_eq!(
            related[0].location.range.start,
            Position {
                line: 0,
                character: 6
            }
        );
    }
}
