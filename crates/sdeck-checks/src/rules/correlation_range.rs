//! `correlation-range`: a `corr` statement that names one shock twice, or whose value
//! lies outside [-1, 1]. `sdeck-semantics` keeps every `corr` statement as resolved
//! (`Structure::correlations`) and lets only true correlations into the model.

use super::Context;
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_semantics::ShockId;
use sdeck_units::number;

pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let shock = |i: ShockId| cx.model.shocks.by_id(i).map_or("", |s| s.name.as_str());
    for c in &cx.analysis.structure.correlations {
        let (first, second) = (shock(c.first), shock(c.second));
        if c.is_self() {
            out.push(
                Diagnostic::new(
                    &rules::CORRELATION_RANGE,
                    c.span.clone(),
                    format!("`{first}` is correlated with itself"),
                )
                .with_help(
                    "a shock's correlation with itself is always 1; name two different shocks",
                ),
            );
            continue;
        }
        let Some(rho) = c.value.filter(|_| c.is_out_of_range()) else {
            continue;
        };
        let text = cx.source.get(c.value_span.clone()).unwrap_or("").trim();
        let written = if c.written_as_number {
            text.to_string()
        } else {
            format!("`{text}` = {}", number::plain(rho))
        };
        out.push(
            Diagnostic::new(
                &rules::CORRELATION_RANGE,
                c.value_span.clone(),
                format!(
                    "the correlation of `{first}` and `{second}` is {written}, outside [-1, 1]"
                ),
            )
            .with_label("must lie in [-1, 1]")
            .with_help(
                "a correlation is a number between -1 and 1; a value in percent is written `40%`",
            ),
        );
    }
}
