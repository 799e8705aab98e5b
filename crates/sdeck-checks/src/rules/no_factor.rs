//! `no-factor`: a model (or an empty file) that declares no factor, so nothing is derived.

use super::Context;
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_syntax::ast::StatementKind;

/// At the `model` line, else the first statement, else the start of the file. A model with
/// errors is left to them.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    if cx.broken || !cx.model.factors.is_empty() {
        return;
    }
    let file = &cx.analysis.file;
    let span = file
        .statements
        .iter()
        .find(|s| matches!(s.kind, StatementKind::Model { .. }))
        .or(file.statements.first())
        .map_or(0..0, |s| s.span.clone());
    let what = if file.statements.is_empty() {
        "the file holds no statement"
    } else {
        "the model declares no factor"
    };
    out.push(
        Diagnostic::new(
            &rules::NO_FACTOR,
            span,
            format!("{what}: nothing is derived, and no equation, unit or figure is checked"),
        )
        .with_help("declare a factor and its equation (`factor r = 2%` and `dr = ... dt + ... dW`), or leave this file out of the paths checked"),
    );
}
