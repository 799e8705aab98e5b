//! `moment-explosion`: a price whose second moment becomes infinite before the horizon.

use super::shared::{equation_span, state_name};
use super::Context;
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_units::number::significant_whole;

/// A price whose second moment becomes infinite before the horizon.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let (model, derivation) = (cx.model, cx.derivation);
    let clock = &model.clock.unit;
    let horizon = model.horizon;
    for (index, time) in
        sdeck_calculus::exponential_affine::variance_explosions(model, derivation, horizon)
    {
        let Some(span) = equation_span(model, index) else {
            continue;
        };
        let name = state_name(model, index);
        out.push(
            Diagnostic::new(
                &rules::MOMENT_EXPLOSION,
                span,
                format!(
                    "the variance of {name} is infinite from t = {} {clock}, before the horizon \
                     ({} {clock}): E[{name}²] has no finite value after that time",
                    significant_whole(time, 4),
                    significant_whole(horizon, 4)
                ),
            )
            .with_help(
                "lower the volatility of the factor that drives the variance, make its \
                 correlation with the price smaller or negative, or shorten the horizon",
            ),
        );
    }
}
