//! `factor-domain`: sqrt or log of a factor whose law leaves the domain, declared bounds
//! a family cannot keep, impossible starts.

use super::shared::{equation_span, show_interval, state_name, state_span};
use super::Context;
use sdeck_calculus::algebra::to_poly;
use sdeck_calculus::{Family, StateLaw};
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_semantics::{Expr, Factor, FactorId, Function, Interval, Model};
use sdeck_units::number::significant_whole;

/// Whether a square-root state fails the Feller condition (zero is attainable).
fn square_root_reaches_zero(law: &StateLaw) -> bool {
    law.square_root
        .as_ref()
        .is_some_and(|sr| 2.0 * sr.speed * sr.level < sr.vol * sr.vol)
}

/// Applications of sqrt, log or a half power to an expression mentioning states.
fn restricted_calls<'e>(expr: &'e Expr, out: &mut Vec<(&'static str, &'e Expr)>) {
    expr.walk(&mut |e| match e {
        Expr::Call(Function::Sqrt, args) => args.iter().for_each(|a| out.push(("sqrt", a))),
        Expr::Call(Function::Log, args) => args.iter().for_each(|a| out.push(("log", a))),
        Expr::Pow(base, exponent) => {
            if matches!(**exponent, Expr::Const(e) if e.fract() != 0.0) {
                out.push(("sqrt", base.as_ref()));
            }
        }
        _ => {}
    });
}

/// `factor-domain`: sqrt/log of a state whose law leaves the domain, declared bounds a
/// family cannot keep, impossible starts.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    restricted_arguments(cx, out);
    bounds_and_starts(cx, out);
}

/// (a) `sqrt` or `log` of a Gaussian factor, or `log` of a square-root factor that
/// reaches zero.
fn restricted_arguments(cx: &Context, out: &mut Vec<Diagnostic>) {
    let (model, derivation) = (cx.model, cx.derivation);
    for state in model.factors.iter() {
        let Some(eq) = &state.equation else {
            continue;
        };
        let mut calls = Vec::new();
        restricted_calls(&eq.drift, &mut calls);
        for term in &eq.diffusion {
            restricted_calls(&term.coefficient, &mut calls);
        }
        let mut reported = Vec::new();
        for (function, argument) in calls {
            let Ok(poly) = to_poly(argument) else {
                continue;
            };
            if poly.state_degree() != 1 {
                continue;
            }
            for gaussian in poly.states() {
                let Some(law) = derivation.states.by_id(gaussian) else {
                    continue;
                };
                let reaches_zero = function == "log" && square_root_reaches_zero(law);
                let gaussian_law = law.is_gaussian_with_noise();
                if !(gaussian_law || reaches_zero) || reported.contains(&(function, gaussian)) {
                    continue;
                }
                reported.push((function, gaussian));
                let name = state_name(model, gaussian);
                let domain = if function == "log" {
                    "positive"
                } else {
                    "non-negative"
                };
                let message = if gaussian_law {
                    format!(
                        "`{function}` of {name} in the equation of {}: {name} is {} (Gaussian), \
                         so it takes negative values with positive probability and `{function}` \
                         needs a {domain} argument",
                        state.name,
                        law.family.as_str()
                    )
                } else {
                    format!(
                        "`log` of {name} in the equation of {}: {name} is square-root and fails \
                         the Feller condition, so it reaches zero, where `log` is undefined",
                        state.name
                    )
                };
                let help = if function == "sqrt" {
                    format!(
                        "use a square-root diffusion for {name} (`vol * sqrt({name}) dW`) so \
                         that it stays non-negative, or write `sqrt(max({name}, 0))`"
                    )
                } else {
                    format!(
                        "model log {name} itself as the factor, or give {name} a proportional \
                         diffusion (`vol * {name} dW`) so that it stays positive"
                    )
                };
                out.push(
                    Diagnostic::new(&rules::FACTOR_DOMAIN, eq.span.clone(), message)
                        .with_help(help)
                        .with_related(state_span(model, gaussian), format!("{name} declared here")),
                );
            }
        }
    }
}

/// (b), (c), (d): a start the family cannot leave or take, and a declared domain the
/// family's law spreads beyond.
fn bounds_and_starts(cx: &Context, out: &mut Vec<Diagnostic>) {
    let (model, derivation) = (cx.model, cx.derivation);
    for (index, law) in derivation.states.iter_ids() {
        let Some(state) = model.factors.by_id(index) else {
            continue;
        };
        if let Some(d) = impossible_start(state, law) {
            out.push(d);
        } else if state.has_domain {
            out.extend(domain_left(model, index, state, law));
        }
    }
}

/// (b), (c): a geometric factor starting at or below zero, a square-root factor below.
fn impossible_start(state: &Factor, law: &StateLaw) -> Option<Diagnostic> {
    let (name, x0) = (&state.name, state.initial);
    let (message, help) = match law.family {
        Family::GeometricBrownian if x0 <= 0.0 => {
            let what = if x0 == 0.0 {
                "stays at zero forever"
            } else {
                "stays negative"
            };
            (
                format!(
                    "{name} is geometric-brownian and starts at {}: it {what}, since a \
                     proportional diffusion keeps the sign of its start",
                    significant_whole(state.written, 4)
                ),
                format!("start {name} at a positive value"),
            )
        }
        Family::SquareRoot if x0 < 0.0 => (
            format!(
                "{name} is square-root and starts at {}: sqrt({name}) is undefined below zero",
                significant_whole(state.written, 4)
            ),
            format!("start {name} at zero or above"),
        ),
        _ => return None,
    };
    Some(Diagnostic::new(&rules::FACTOR_DOMAIN, state.span.clone(), message).with_help(help))
}

/// (d): a declared domain that the support of the factor's law reaches beyond.
fn domain_left(
    model: &Model,
    index: FactorId,
    state: &Factor,
    law: &StateLaw,
) -> Option<Diagnostic> {
    let name = &state.name;
    let support = match law.family {
        Family::GeometricBrownian if state.initial > 0.0 => Some((Some((0.0, false)), "(0, ∞)")),
        Family::SquareRoot => Some((Some((0.0, true)), "[0, ∞)")),
        _ if law.is_gaussian_with_noise() => Some((None, "the whole real line")),
        _ => None,
    };
    let (lower, support_text) = support?;
    if interval_keeps(&state.domain, lower) {
        return None;
    }
    let keep = match law.family {
        Family::OrnsteinUhlenbeck | Family::ArithmeticBrownian | Family::Linear => format!(
            "use a square-root diffusion (`vol * sqrt({name}) dW`) to keep {name} ≥ 0, or \
             drop the bound"
        ),
        _ => "widen the bound to the support of the law, or drop it".to_string(),
    };
    Some(
        Diagnostic::new(
            &rules::FACTOR_DOMAIN,
            state.span.clone(),
            format!(
                "{name} is {} and its law spreads over {support_text}, so it leaves the \
                 declared domain {} with positive probability",
                law.family.as_str(),
                show_interval(&state.domain)
            ),
        )
        .with_help(keep)
        .with_related(
            equation_span(model, index).unwrap_or_else(|| state.span.clone()),
            "the equation that sets the law",
        ),
    )
}

/// Whether `domain` contains the support `[lower, ∞)` (or `(lower, ∞)`, or ℝ when
/// `lower` is `None`).
pub(super) fn interval_keeps(domain: &Interval, lower: Option<(f64, bool)>) -> bool {
    if domain.upper.is_some() {
        return false;
    }
    match (domain.lower, lower) {
        (None, _) => true,
        (Some(_), None) => false,
        (Some((bound, bound_inclusive)), Some((support, support_inclusive))) => {
            bound < support || (bound == support && (bound_inclusive || !support_inclusive))
        }
    }
}
