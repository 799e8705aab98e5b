//! Code actions: every fix a diagnostic carries becomes a quick fix (the rules build them:
//! a Feller breach moves the speed or the volatility to the boundary, a correlation
//! matrix that is not positive semi-definite becomes the nearest correlation matrix); and
//! any equation offers to insert its derived moments as a comment above it.

use crate::analysis::Analyzed;
use crate::documents::PositionEncoding;
use crate::durations::half_life_unit;
use sdeck_diagnostics::{Span, TextEdit};
use sdeck_units::number::plain;
use std::collections::HashMap;
use tower_lsp::lsp_types::{
    CodeAction, CodeActionKind, CodeActionOrCommand, Range, Url, WorkspaceEdit,
};

pub fn code_actions(
    a: &Analyzed,
    encoding: PositionEncoding,
    uri: &Url,
    range: Range,
) -> Vec<CodeActionOrCommand> {
    let converter = a.converter(encoding);
    let mut out = Vec::new();
    let action = |title: String,
                  kind: CodeActionKind,
                  edits: &[TextEdit],
                  diagnostic: Option<&sdeck_diagnostics::Diagnostic>,
                  preferred: bool| {
        CodeActionOrCommand::CodeAction(CodeAction {
            title,
            kind: Some(kind),
            diagnostics: diagnostic.map(|d| vec![converter.diagnostic(uri, d)]),
            edit: Some(WorkspaceEdit {
                changes: Some(HashMap::from([(uri.clone(), converter.edits(edits))])),
                document_changes: None,
                change_annotations: None,
            }),
            command: None,
            is_preferred: preferred.then_some(true),
            disabled: None,
            data: None,
        })
    };
    for d in &a.check.diagnostics {
        if !converter.meets(&d.span, range) {
            continue;
        }
        for fix in &d.fixes {
            out.push(action(
                fix.title.clone(),
                CodeActionKind::QUICKFIX,
                &fix.edits,
                Some(d),
                fix.preferred,
            ));
        }
    }
    for (title, edits) in moments_comment(a, |span| converter.meets(span, range)) {
        out.push(action(title, CodeActionKind::REFACTOR, &edits, None, false));
    }
    out
}

/// For each equation the range touches: its derived moments as a comment above it, from
/// the factor's report at the horizon (the data `sdeck moments` prints).
fn moments_comment(a: &Analyzed, in_range: impl Fn(&Span) -> bool) -> Vec<(String, Vec<TextEdit>)> {
    let model = &a.check.analysis.model;
    let clock = &model.clock.unit;
    let mut out = Vec::new();
    for (i, state) in model.factors.iter_ids() {
        let Some(equation) = &state.equation else {
            continue;
        };
        if !in_range(&equation.span) {
            continue;
        }
        let Some(report) = a.horizon_report(i) else {
            continue;
        };
        let line_start = sdeck_syntax::lines::line_start(&a.text, equation.span.start);
        let indent: String = a
            .text
            .get(line_start..equation.span.start)
            .unwrap_or("")
            .chars()
            .take_while(|c| c.is_whitespace())
            .collect();
        let mut lines = vec![format!("{}: {}", report.name, report.family.as_str())];
        let formulas = &report.formulas;
        for (label, text) in [
            ("mean", &formulas.mean),
            ("variance", &formulas.variance),
            ("stationary", &formulas.stationary),
        ] {
            if let Some(t) = text {
                lines.push(format!("{label:<10} {}", t.replace('\n', " ")));
            }
        }
        let figures = &report.figures;
        if let (Some(m), Some(v)) = (figures.mean, figures.variance) {
            if m.is_finite() && v.is_finite() && v >= 0.0 {
                lines.push(format!(
                    "at t = {} {clock}: mean {}, sd {}",
                    plain(figures.at),
                    plain(m),
                    plain(v.sqrt())
                ));
            }
        }
        if let Some(h) = report.half_life {
            let unit = half_life_unit(a, i, h);
            lines.push(format!("half-life {}", unit.show(h)));
        }
        let text: String = lines.iter().map(|l| format!("{indent}# {l}\n")).collect();
        out.push((
            format!(
                "Insert the derived moments of `{}` as a comment",
                report.name
            ),
            vec![TextEdit {
                span: line_start..line_start,
                new_text: text,
            }],
        ));
    }
    out
}
