//! What a model means, without positions: the text two files share exactly when they
//! describe the same model. The formatter's tests and its fuzz target compare it before
//! and after formatting; nothing else should be read from it.

use crate::model::Model;
use std::fmt::Write;

/// Names, values in clock units, resolved expressions, bounds, correlations, the
/// horizon, clock, measure and discount rate of `model`, one line per declaration.
pub fn meaning(model: &Model) -> String {
    let mut out = format!("{} {} {:?}\n", model.name, model.clock.unit, model.horizon);
    for p in &model.params {
        let _ = writeln!(
            out,
            "param {} {:?} {:?} {:?} {:?} {:?}",
            p.name, p.value, p.unit_text, p.bound, p.description, p.expr
        );
    }
    for s in &model.factors {
        let eq = s.equation.as_ref().map(|e| {
            let terms: Vec<String> = e
                .diffusion
                .iter()
                .map(|d| format!("{}:{:?}", d.noise, d.coefficient))
                .collect();
            format!("{:?} | {}", e.drift, terms.join(" "))
        });
        let _ = writeln!(
            out,
            "factor {} {:?} {:?} {:?} {:?}",
            s.name, s.initial, s.domain, eq, s.initial_expr
        );
    }
    for n in &model.shocks {
        let _ = writeln!(out, "shock {} {:?}", n.name, n.description);
    }
    for c in &model.correlations {
        let _ = writeln!(
            out,
            "corr {} {} {:?} {:?}",
            c.first, c.second, c.value, c.expr
        );
    }
    for l in &model.lets {
        let _ = writeln!(out, "let {} {:?}", l.name, l.value);
    }
    for e in &model.expectations {
        let _ = writeln!(
            out,
            "expect {:?} {:?} {:?} {:?} {:?} {:?}",
            e.figure, e.state, e.side, e.level, e.at, e.admissible
        );
    }
    if let Some(m) = &model.measure {
        let _ = writeln!(out, "measure {}", m.measure.as_str());
    }
    if let Some(d) = &model.discount {
        let _ = writeln!(out, "discount {:?} {}", d.rate, d.per_year);
    }
    out
}
