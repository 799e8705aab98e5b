//! `discount-measure`: a `discount` rate whose drifts are not stated to be risk-neutral.

use super::Context;
use sdeck_diagnostics::{rules, Diagnostic};

/// A `discount` rate whose drifts are not stated to be risk-neutral.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let model = cx.model;
    let Some(discount) = &model.discount else {
        return;
    };
    match &model.measure {
        Some(m) if m.measure == sdeck_semantics::MeasureKind::RiskNeutral => {}
        Some(m) => out.push(
            Diagnostic::new(
                &rules::DISCOUNT_MEASURE,
                discount.span.clone(),
                "the drifts are written under the real-world measure: the curve of this \
                 rate is not the model's arbitrage-free price of a bond",
            )
            .with_related(m.span.clone(), "the measure is stated here")
            .with_help(
                "put the market price of risk into the drifts and state `measure risk-neutral`",
            ),
        ),
        None => out.push(
            Diagnostic::new(
                &rules::DISCOUNT_MEASURE,
                discount.span.clone(),
                "no `measure` line: bond prices from this rate are arbitrage-free only if the \
                 drifts are risk-neutral, and the model does not say so",
            )
            .with_help("add `measure risk-neutral` if the drifts are written under it")
            .with_fix(
                "Add `measure risk-neutral`",
                vec![sdeck_diagnostics::TextEdit {
                    span: discount.span.start..discount.span.start,
                    new_text: "measure risk-neutral\n".to_string(),
                }],
            ),
        ),
    }
}
