//! Code actions: every fix a diagnostic carries becomes a quick fix; a Feller breach
//! offers to move the speed or the volatility to the boundary; a correlation matrix that
//! is not positive semi-definite offers the nearest correlation matrix; and any equation
//! offers to insert its derived moments as a comment above it.

use crate::analysis::Analyzed;
use crate::documents::PositionEncoding;
use crate::nearest_correlation::nearest_correlation_rounded;
use sdeck_diagnostics::{rules, Span, TextEdit};
use sdeck_semantics::{fmt_num, SymbolKind};
use sdeck_syntax::ast::StatementKind;
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
        for (k, fix) in d.fixes.iter().enumerate() {
            out.push(action(
                fix.title.clone(),
                CodeActionKind::QUICKFIX,
                &fix.edits,
                Some(d),
                k == 0,
            ));
        }
        if d.rule == rules::FELLER_CONDITION.name {
            for (title, edits) in feller_fixes(a, &d.span) {
                out.push(action(
                    title,
                    CodeActionKind::QUICKFIX,
                    &edits,
                    Some(d),
                    false,
                ));
            }
        }
        if d.rule == rules::CORRELATION_NOT_PSD.name {
            if let Some((title, edits)) = nearest_correlation_fix(a) {
                out.push(action(
                    title,
                    CodeActionKind::QUICKFIX,
                    &edits,
                    Some(d),
                    true,
                ));
            }
        }
    }
    for (title, edits) in moments_comment(a, |span| converter.meets(span, range)) {
        out.push(action(title, CodeActionKind::REFACTOR, &edits, None, false));
    }
    out
}

fn overlaps(a: &Span, b: &Span) -> bool {
    a.start <= b.end && b.start <= a.end
}

/// A Feller bound written in the style of the literal it replaces (`%`, `bp` or plain),
/// with the digits of the diagnostic's message.
fn written_like(original: &str, value: f64) -> String {
    let (factor, suffix) = if original.ends_with('%') {
        (100.0, "%")
    } else if original.ends_with("bp") {
        (10_000.0, "bp")
    } else {
        (1.0, "")
    };
    format!("{}{suffix}", sdeck_checks::feller_number(value * factor))
}

/// Moving the speed up, or the volatility down, to the Feller boundary 2·speed·level = vol².
fn feller_fixes(a: &Analyzed, span: &Span) -> Vec<(String, Vec<TextEdit>)> {
    let model = &a.check.analysis.model;
    let mut out = Vec::new();
    for (j, state) in model.factors.iter().enumerate() {
        let touches = overlaps(&state.span, span)
            || state
                .equation
                .as_ref()
                .is_some_and(|e| overlaps(&e.span, span));
        if !touches {
            continue;
        }
        let Some(bounds) = sdeck_checks::feller_bounds(model, &a.check.derivation, j) else {
            continue;
        };
        let Some(terms) =
            sdeck_calculus::describe::square_root_terms(model, &a.check.derivation, j)
        else {
            continue;
        };
        let wanted = [
            (bounds.speed, "Raise", "2·{speed}·{level} = {vol2}"),
            (bounds.vol, "Lower", "{vol2} = 2·{speed}·{level}"),
        ];
        for (bound, verb, boundary) in wanted {
            let Some((p, value)) = bound else { continue };
            let Some(p) = model.params.get(p) else {
                continue;
            };
            let Some(number) = a
                .declaration(SymbolKind::Param, &p.name)
                .and_then(|d| d.literal())
            else {
                continue;
            };
            let text = written_like(&number.text, value);
            let boundary = boundary
                .replace("{speed}", &terms.speed)
                .replace("{level}", &terms.level)
                .replace("{vol2}", &terms.vol_squared);
            out.push((
                format!(
                    "{verb} `{}` to {text} (Feller boundary: {boundary})",
                    p.name
                ),
                vec![TextEdit {
                    span: number.span.clone(),
                    new_text: text,
                }],
            ));
        }
    }
    out
}

/// Replaces the `corr` values with the nearest correlation matrix (Higham 2002), adding
/// `corr` statements for pairs that become correlated.
fn nearest_correlation_fix(a: &Analyzed) -> Option<(String, Vec<TextEdit>)> {
    let model = &a.check.analysis.model;
    let matrix = model.correlation_matrix();
    let near = nearest_correlation_rounded(&matrix, 4)?;
    let mut edits = Vec::new();
    let mut written = vec![vec![false; near.len()]; near.len()];
    let mut last_corr_end: Option<usize> = None;
    let mut last_noise_end: Option<usize> = None;
    // A correlation written as a parameter alone (`corr W, B = rho`) is mended by
    // rewriting the parameter's value; one written as any other expression cannot be.
    let mut param_targets: Vec<(usize, f64)> = Vec::new();
    for statement in &a.check.analysis.file.statements {
        match &statement.kind {
            StatementKind::Corr { first, second, .. } => {
                last_corr_end = Some(statement.span.end);
                let i = model.shocks.iter().position(|n| n.name == first.name)?;
                let j = model.shocks.iter().position(|n| n.name == second.name)?;
                if i == j {
                    continue;
                }
                let target = near.get(i)?.get(j).copied()?;
                written[i][j] = true;
                written[j][i] = true;
                let c = model
                    .correlations
                    .iter()
                    .find(|c| c.span == statement.span)?;
                if (target - c.value).abs() <= 1e-12 {
                    continue;
                }
                match &c.expr {
                    None => edits.push(TextEdit {
                        span: c.value_span.clone(),
                        new_text: fmt_num(target),
                    }),
                    Some(sdeck_semantics::Expr::Param(p)) => {
                        if param_targets.iter().any(|(q, t)| q == p && *t != target) {
                            return None;
                        }
                        param_targets.push((*p, target));
                    }
                    Some(_) => return None,
                }
            }
            StatementKind::Shock { .. } => last_noise_end = Some(statement.span.end),
            _ => {}
        }
    }
    for (p, target) in param_targets {
        let param = model.params.get(p)?;
        let number = a
            .declaration(SymbolKind::Param, &param.name)
            .and_then(|d| d.literal())?;
        if param.scale != 1.0 || param.bound.is_some_and(|b| !b.contains(target)) {
            return None;
        }
        // The parameter must not also be used anywhere but in correlations.
        let elsewhere = a.check.analysis.references.iter().any(|r| {
            r.declaration == param.name_span
                && !model
                    .correlations
                    .iter()
                    .any(|c| c.value_span.start <= r.span.start && r.span.end <= c.value_span.end)
        });
        if elsewhere {
            return None;
        }
        edits.push(TextEdit {
            span: number.span.clone(),
            new_text: fmt_num(target),
        });
    }
    let mut added = String::new();
    for i in 0..near.len() {
        for j in i + 1..near.len() {
            if !written[i][j] && near[i][j] != 0.0 {
                added.push_str(&format!(
                    "corr {} {} = {}\n",
                    model.shocks[i].name,
                    model.shocks[j].name,
                    fmt_num(near[i][j])
                ));
            }
        }
    }
    if !added.is_empty() {
        let after = last_corr_end.or(last_noise_end).unwrap_or(0);
        let next = sdeck_syntax::lines::next_line_start(&a.text, after);
        let at = (next > sdeck_syntax::lines::line_end(&a.text, after)).then_some(next);
        match at {
            Some(at) => edits.push(TextEdit {
                span: at..at,
                new_text: added,
            }),
            None => edits.push(TextEdit {
                span: a.text.len()..a.text.len(),
                new_text: format!("\n{added}"),
            }),
        }
    }
    if edits.is_empty() {
        return None;
    }
    Some((
        "Replace the correlations with the nearest correlation matrix (Higham 2002)".to_string(),
        edits,
    ))
}

/// For each equation the range touches: its derived moments as a comment above it.
fn moments_comment(a: &Analyzed, in_range: impl Fn(&Span) -> bool) -> Vec<(String, Vec<TextEdit>)> {
    let model = &a.check.analysis.model;
    let clock = &model.clock.unit;
    let mut out = Vec::new();
    for (i, state) in model.factors.iter().enumerate() {
        let Some(equation) = &state.equation else {
            continue;
        };
        if !in_range(&equation.span) {
            continue;
        }
        let Some(law) = a.check.derivation.states.get(i) else {
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
        let mut lines = vec![format!("{}: {}", state.name, law.family.as_str())];
        let formulas = sdeck_calculus::formulas(model, &a.check.derivation, i);
        for (label, text) in [
            ("mean", &formulas.mean),
            ("variance", &formulas.variance),
            ("stationary", &formulas.stationary),
        ] {
            if let Some(t) = text {
                lines.push(format!("{label:<10} {}", t.replace('\n', " ")));
            }
        }
        let figures = a.horizon_moments(i);
        let (mean, variance) = (figures.mean, figures.variance);
        if let (Some(m), Some(v)) = (mean, variance) {
            if m.is_finite() && v.is_finite() && v >= 0.0 {
                lines.push(format!(
                    "at t = {} {clock}: mean {}, sd {}",
                    fmt_num(model.horizon),
                    fmt_num(m),
                    fmt_num(v.sqrt())
                ));
            }
        }
        if let Some(h) = law.half_life {
            lines.push(format!("half-life {} {clock}", fmt_num(h)));
        }
        let text: String = lines.iter().map(|l| format!("{indent}# {l}\n")).collect();
        out.push((
            format!(
                "Insert the derived moments of `{}` as a comment",
                state.name
            ),
            vec![TextEdit {
                span: line_start..line_start,
                new_text: text,
            }],
        ));
    }
    out
}
