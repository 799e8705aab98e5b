//! `unused`: a parameter, shock or let that nothing uses. The semantic layer records what
//! each name is used by (`Analysis::usage`); this rule reads it.

use super::Context;
use sdeck_diagnostics::{rules, Diagnostic, Span, TextEdit};
use sdeck_syntax::lines::{line_start, next_line_start};

pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let usage = &cx.analysis.usage;
    let unused = |used: &[bool], i: usize, name: &str| {
        !used.get(i).copied().unwrap_or(true) && !mentioned_in_unparsed(cx, name)
    };
    for (i, p) in cx.model.params.iter().enumerate() {
        if unused(&usage.params, i, &p.name) {
            let help = "use it in an equation or a let, or remove it";
            out.push(removable(
                cx,
                "parameter",
                &p.name,
                &p.name_span,
                &p.span,
                help,
            ));
        }
    }
    for (i, n) in cx.model.shocks.iter().enumerate() {
        if unused(&usage.shocks, i, &n.name) {
            out.push(
                Diagnostic::new(
                    &rules::UNUSED,
                    n.name_span.clone(),
                    format!("shock `{}` drives no equation", n.name),
                )
                .with_help(format!(
                    "add a term `... d{}` to an equation, or remove the shock",
                    n.name
                )),
            );
        }
    }
    for (i, l) in cx.model.lets.iter().enumerate() {
        if unused(&usage.lets, i, &l.name) {
            let help = "use it in an equation or another let, or remove it";
            out.push(removable(cx, "let", &l.name, &l.name_span, &l.span, help));
        }
    }
}

/// `WHAT NAME is never used`, at the name, with the fix that removes the declaration's
/// lines.
fn removable(
    cx: &Context,
    what: &str,
    name: &str,
    name_span: &Span,
    declaration: &Span,
    help: &str,
) -> Diagnostic {
    Diagnostic::new(
        &rules::UNUSED,
        name_span.clone(),
        format!("{what} `{name}` is never used"),
    )
    .with_help(help)
    .with_fix(
        format!("Remove `{name}`"),
        vec![TextEdit {
            span: whole_lines(cx.source, declaration),
            new_text: String::new(),
        }],
    )
}

/// Whether `name` appears as a word (or as `dNAME`) in text that did not parse: a use
/// may hide there, so the name is not called unused.
fn mentioned_in_unparsed(cx: &Context, name: &str) -> bool {
    cx.analysis.file.unparsed.iter().any(|span| {
        let text = cx.source.get(span.clone()).unwrap_or("");
        text.split(|c: char| !(c.is_alphanumeric() || c == '_'))
            .any(|word| word == name || word.strip_prefix('d') == Some(name))
    })
}

/// The lines that hold `span`, line break included.
fn whole_lines(source: &str, span: &Span) -> Span {
    line_start(source, span.start)..next_line_start(source, span.end)
}
