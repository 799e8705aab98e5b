//! `bound-violated` at a declaration: a parameter's value, or a factor's initial value,
//! outside the bound declared beside it. The rule's other places (a horizon that is not
//! positive, a schedule's knots, the time or probability of an expectation) arise while
//! values are converted and are reported by `sdeck-semantics`, which drops the value.

use super::shared::describe_bound;
use super::Context;
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_syntax::ast::Declaration;
use sdeck_units::number;

pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    for (i, p) in cx.model.params.iter_ids() {
        if let Some(decl) = cx
            .analysis
            .param_declaration(i)
            .filter(|_| p.breaks_bound())
        {
            out.push(finding(cx, decl, "parameter", p.value));
        }
    }
    for (i, f) in cx.model.factors.iter_ids() {
        if let Some(decl) = cx
            .analysis
            .factor_declaration(i)
            .filter(|_| f.breaks_domain())
        {
            out.push(finding(cx, decl, "initial value of factor", f.initial));
        }
    }
}

/// At the value, with the bound as a related place.
fn finding(cx: &Context, decl: &Declaration, what: &str, value: f64) -> Diagnostic {
    let written = match decl.literal() {
        Some(number) => number.text.clone(),
        None => format!(
            "`{}` = {}",
            cx.source.get(decl.value_span()).unwrap_or("").trim(),
            number::plain(value)
        ),
    };
    let mut d = Diagnostic::new(
        &rules::BOUND_VIOLATED,
        decl.value_span(),
        format!(
            "the {what} `{}` is {written}, outside its declared bound {}",
            decl.name.name,
            describe_bound(decl.bound.as_deref()),
        ),
    )
    .with_label("outside the bound")
    .with_help("change the value, or widen the bound if the value is right");
    if let Some(bound) = &decl.bound {
        d = d.with_related(bound.span.clone(), "the bound");
    }
    d
}
