//! Helpers shared by the rules that need the calculus: names and spans of factors, numbers
//! with significant digits, intervals as a reader writes them.

use sdeck_semantics::{Analysis, FactorId, Interval, Model};
use sdeck_syntax::ast::{Bound, Number, StatementKind, UnitExpr};
use sdeck_units::number::significant_whole;

pub(crate) fn state_name(model: &Model, state: FactorId) -> String {
    model
        .factors
        .by_id(state)
        .map(|s| s.name.clone())
        .unwrap_or_default()
}

pub(crate) fn equation_span(model: &Model, state: FactorId) -> Option<std::ops::Range<usize>> {
    model
        .factors
        .by_id(state)?
        .equation
        .as_ref()
        .map(|e| e.span.clone())
}

pub(crate) fn state_span(model: &Model, state: FactorId) -> std::ops::Range<usize> {
    model
        .factors
        .by_id(state)
        .map(|s| s.name_span.clone())
        .unwrap_or(0..0)
}

pub(crate) fn show_interval(interval: &Interval) -> String {
    show_interval_with(interval, |v| significant_whole(v, 6))
}

/// An interval with its ends shown by `show`.
pub(crate) fn show_interval_with(interval: &Interval, show: impl Fn(f64) -> String) -> String {
    let lower = match interval.lower {
        None => "(−∞".to_string(),
        Some((v, true)) => format!("[{}", show(v)),
        Some((v, false)) => format!("({}", show(v)),
    };
    let upper = match interval.upper {
        None => "∞)".to_string(),
        Some((v, true)) => format!("{}]", show(v)),
        Some((v, false)) => format!("{})", show(v)),
    };
    format!("{lower}, {upper}")
}

/// The number of the `param` declaration of `name`, when its value is written as one.
pub(crate) fn param_literal<'a>(analysis: &'a Analysis, name: &str) -> Option<&'a Number> {
    analysis
        .file
        .statements
        .iter()
        .find_map(|s| match &s.kind {
            StatementKind::Param(d) if d.name.name == name => Some(d),
            _ => None,
        })?
        .literal()
}

/// The offset just after the `]` that closes a bracketed unit.
pub(crate) fn unit_bracket_end(source: &str, unit: &UnitExpr) -> usize {
    let end = unit.span().end;
    source
        .get(end..)
        .and_then(|rest| rest.find(']'))
        .map(|i| end + i + 1)
        .unwrap_or(end)
}

/// A declared bound as written: `> 0`, `<= 1`, `in [0, 1)`.
pub(crate) fn describe_bound(b: Option<&Bound>) -> String {
    let Some(b) = b else { return String::new() };
    match (&b.lower, &b.upper) {
        (Some(l), None) => format!("{} {}", if l.inclusive { ">=" } else { ">" }, l.value.text),
        (None, Some(u)) => format!("{} {}", if u.inclusive { "<=" } else { "<" }, u.value.text),
        (Some(l), Some(u)) => format!(
            "in {}{}, {}{}",
            if l.inclusive { "[" } else { "(" },
            l.value.text,
            u.value.text,
            if u.inclusive { "]" } else { ")" }
        ),
        (None, None) => "(unbounded)".to_string(),
    }
}
