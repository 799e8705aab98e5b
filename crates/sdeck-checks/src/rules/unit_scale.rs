//! `unit-scale`: a value declared in a unit other than the clock's (`0.2 [1/sqrt(day)]`
//! on a yearly clock) is converted once, by `sdeck-semantics`; this hint says to what,
//! with a fix that writes the converted value in clock units.

use super::shared::unit_bracket_end;
use super::Context;
use sdeck_diagnostics::{rules, Diagnostic, TextEdit};
use sdeck_syntax::ast::Declaration;
use sdeck_units::{number, Dimension};

pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let params = cx.model.params.iter_ids();
    for (i, p) in params {
        if let Some(decl) = cx.analysis.param_declaration(i) {
            out.extend(finding(cx, decl, p.scale, &p.dimension));
        }
    }
    for (i, f) in cx.model.factors.iter_ids() {
        if let Some(decl) = cx.analysis.factor_declaration(i) {
            out.extend(finding(cx, decl, f.scale, &f.dimension));
        }
    }
}

/// At the unit of a declaration written as a number with a unit whose scale to the clock
/// is not 1.
fn finding(
    cx: &Context,
    decl: &Declaration,
    scale: f64,
    dimension: &Dimension,
) -> Option<Diagnostic> {
    let (unit, number) = (decl.unit()?, decl.literal()?);
    if !scale.is_finite() || scale == 1.0 {
        return None;
    }
    let clock_text = dimension.display_in(&cx.model.clock.unit);
    let converted = number.value * scale;
    let new_text = format!("{} [{}]", number::plain(converted), clock_text);
    let replace = number.span.start..unit_bracket_end(cx.source, unit);
    Some(
        Diagnostic::new(
            &rules::UNIT_SCALE,
            unit.span(),
            format!(
                "`{}` = {} [{}] is {} [{}] on the model's clock (×{})",
                decl.name.name,
                number.text,
                sdeck_units::unit_expr_text(unit),
                number::plain(converted),
                clock_text,
                number::plain(scale)
            ),
        )
        .with_help(format!(
            "every computation uses {}; write `{new_text}` to state it in clock units",
            number::plain(converted)
        ))
        .with_fix(
            format!("Rewrite as {new_text}"),
            vec![TextEdit {
                span: replace,
                new_text,
            }],
        ),
    )
}
