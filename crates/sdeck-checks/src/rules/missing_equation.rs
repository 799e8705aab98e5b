//! `missing-equation` for a factor that no equation drives. The rule's other places (an
//! equation `dX` whose `X` is not a factor) arise while names are resolved and are
//! reported by `sdeck-semantics`.

use super::Context;
use sdeck_diagnostics::{rules, Diagnostic, TextEdit};
use sdeck_syntax::lines::next_line_start;
use sdeck_units::Dimension;

/// At the factor's name, with a stub equation after its declaration as a fix to choose:
/// a zero drift written in the drift's unit (the factor's per clock time), so that the
/// stub is sound as written.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let noise = cx.model.shocks.first().map_or("W", |n| n.name.as_str());
    for (i, factor) in cx.model.factors.iter_ids() {
        if !cx.analysis.lacks_equation(i) {
            continue;
        }
        let insert_at = next_line_start(cx.source, factor.span.end);
        let name = &factor.name;
        let drift_unit = factor
            .dimension
            .div(&Dimension::time())
            .display_in(&cx.model.clock.unit);
        out.push(
            Diagnostic::new(
                &rules::MISSING_EQUATION,
                factor.name_span.clone(),
                format!("factor `{name}` has no equation"),
            )
            .with_help(format!(
                "add its dynamics, e.g. `d{name} = ... dt + ... d{noise}`"
            ))
            .with_manual_fix(
                format!("Add an equation for `{name}`"),
                vec![TextEdit {
                    span: insert_at..insert_at,
                    new_text: format!(
                        "d{name} = 0 [{drift_unit}] dt  # TODO: drift and diffusion\n"
                    ),
                }],
            ),
        );
    }
}
