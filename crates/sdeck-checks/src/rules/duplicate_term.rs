//! `duplicate-term`: an equation with two `dt` terms, or two terms in the same shock.
//! `sdeck-semantics` keeps the first term of each differential in the model and records
//! the others (`Structure::repeated_terms`); this rule reports them.

use super::Context;
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_semantics::Differential;

/// At the repeated term, with the first as a related place.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    for term in &cx.analysis.structure.repeated_terms {
        let factor = cx
            .model
            .factors
            .by_id(term.factor)
            .map_or("", |f| f.name.as_str());
        let d = match term.differential {
            Differential::Time => Diagnostic::new(
                &rules::DUPLICATE_TERM,
                term.span.clone(),
                format!("the equation of `{factor}` has a second `dt` term"),
            )
            .with_related(term.first.clone(), "first `dt` term here")
            .with_help("combine the drift into one term: `(a + b) dt`"),
            Differential::Shock(shock) => {
                let shock = cx.model.shocks.by_id(shock).map_or("", |s| s.name.as_str());
                Diagnostic::new(
                    &rules::DUPLICATE_TERM,
                    term.span.clone(),
                    format!("the equation of `{factor}` has a second term in `d{shock}`"),
                )
                .with_related(term.first.clone(), "first term here")
                .with_help(format!("combine them into one term: `(a + b) d{shock}`"))
            }
        };
        out.push(d);
    }
}
