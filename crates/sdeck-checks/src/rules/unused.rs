//! `unused`: a parameter, shock or let that nothing uses. The semantic layer records what
//! each name is used by (`Analysis::usage`); this rule reads it.

use super::Context;
use sdeck_diagnostics::{rules, Diagnostic, Span, TextEdit};
use sdeck_syntax::lines::{line_start, next_line_start};

pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let usage = &cx.analysis.usage;
    let unparsed = words_in_unparsed(cx);
    let unused = |used: &[bool], i: usize, name: &str| {
        !used.get(i).copied().unwrap_or(true) && !unparsed.mentions(name)
    };
    // Exact room: a file of unused parameters has one finding per line.
    let params = cx.model.params.iter().enumerate();
    out.reserve_exact(params.clone().filter(|(i, p)| unused(&usage.params, *i, &p.name)).count());
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
    help: &'static str,
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

/// The words of the text that did not parse: a use of a name may hide there, so a name
/// found among them (or as `dNAME`) is not called unused. Collected once per file, so the
/// rule costs the names plus the unparsed text, not their product.
struct UnparsedWords<'a>(std::collections::HashSet<&'a str>);

impl UnparsedWords<'_> {
    fn mentions(&self, name: &str) -> bool {
        !self.0.is_empty()
            && (self.0.contains(name) || {
                let differential = format!("d{name}");
                self.0.contains(differential.as_str())
            })
    }
}

fn words_in_unparsed<'a>(cx: &Context<'a>) -> UnparsedWords<'a> {
    let source: &'a str = cx.source;
    let words = cx
        .analysis
        .file
        .unparsed
        .iter()
        .flat_map(|span| {
            source
                .get(span.clone())
                .unwrap_or("")
                .split(|c: char| !(c.is_alphanumeric() || c == '_'))
        })
        .filter(|word| !word.is_empty())
        .collect();
    UnparsedWords(words)
}

/// The lines that hold `span`, line break included.
fn whole_lines(source: &str, span: &Span) -> Span {
    line_start(source, span.start)..next_line_start(source, span.end)
}
