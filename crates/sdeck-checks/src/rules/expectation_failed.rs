//! `expectation-failed`: a pinned figure outside its admissible interval, or a figure
//! that does not exist for the factor's family.

use super::shared::{show_interval_with, state_name};
use super::Context;
use sdeck_calculus::StateLaw;
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_semantics::{Expectation, Interval, Model, Shown};
use sdeck_syntax::ast::{Figure, Side};
use sdeck_units::number::significant_whole;

/// `expectation-failed`: a pinned figure outside its admissible interval, or a figure
/// that does not exist for the state's family.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    let (model, derivation) = (cx.model, cx.derivation);
    // On a model with errors the derived figures may rest on what did not resolve;
    // pinned expectations wait until the model is sound.
    if cx.broken {
        return;
    }
    for expectation in &model.expectations {
        // Each expectation may cost a law by Fourier inversion: a stale text stops here
        // (the check is then abandoned as a whole).
        if (cx.stale)() {
            return;
        }
        let law = match expectation.state {
            Some(state) => match derivation.states.by_id(state) {
                Some(law) => Some(law),
                None => continue,
            },
            None => None,
        };
        let value = cx.expectation_value(expectation);
        let finding = match (value, law) {
            (Err(reason), _) if expectation.figure.on_curve() => {
                Some(no_curve_figure(model, expectation, &reason))
            }
            (Err(reason), Some(law)) => Some(no_figure(model, expectation, law, &reason)),
            (Err(_), None) => None,
            (Ok(v), _) if !expectation.admissible.contains(v) => {
                Some(outside(model, expectation, law, v))
            }
            (Ok(_), _) => None,
        };
        out.extend(finding);
    }
}

/// A figure of the curve (a price, yield or forward) that does not exist, and `reason`.
fn no_curve_figure(model: &Model, expectation: &Expectation, reason: &str) -> Diagnostic {
    let described = describe_expectation(model, expectation);
    let help = if model.discount.is_none() {
        "add the short rate, affine in the factors, e.g. `discount r`, or remove the expectation"
    } else {
        "the rate must be affine in the factors and its transform finite up to the maturity; \
         pin a shorter maturity or remove the expectation"
    };
    Diagnostic::new(
        &rules::EXPECTATION_FAILED,
        expectation.span.clone(),
        format!("{described} does not exist: {reason}"),
    )
    .with_help(help)
}

/// A figure of a factor that its family does not have (`reason` says why).
fn no_figure(model: &Model, expectation: &Expectation, law: &StateLaw, reason: &str) -> Diagnostic {
    let described = describe_expectation(model, expectation);
    let why = match expectation.figure {
        Figure::Halflife => "no half-life (that needs a constant negative slope of its own drift)",
        Figure::StationaryMean | Figure::StationaryVariance | Figure::StationarySd => {
            "no stationary law"
        }
        _ => reason,
    };
    let name = expectation
        .state
        .map(|i| state_name(model, i))
        .unwrap_or_default();
    let mut d = Diagnostic::new(
        &rules::EXPECTATION_FAILED,
        expectation.span.clone(),
        format!(
            "{described} does not exist: {name} is {} and has {why} ({})",
            law.family.as_str(),
            law.reason
        ),
    )
    .with_help("pin a figure that the family has, or remove the expectation");
    if let Some(note) = overflow_note(model) {
        d = d.with_note(note);
    }
    d
}

/// A figure `v` outside the admissible values; `law` is the factor's (none for the curve).
fn outside(
    model: &Model,
    expectation: &Expectation,
    law: Option<&StateLaw>,
    v: f64,
) -> Diagnostic {
    let described = describe_expectation(model, expectation);
    let show = |v: f64| show_figure(&expectation.shown, v);
    let clock = &model.clock.unit;
    let note = match (&expectation.shown, law) {
        (Shown::Clock, Some(law)) => format!(
            "figures are in clock units ({clock}); derived by {}",
            law.method.as_str()
        ),
        (_, Some(law)) => format!("derived by {}", law.method.as_str()),
        (_, None) => "yields and forwards are continuously compounded annual rates; derived \
                      from the `discount` rate"
            .to_string(),
    };
    Diagnostic::new(
        &rules::EXPECTATION_FAILED,
        expectation.span.clone(),
        format!(
            "{described} = {}; expected {}",
            show(v),
            expected_text(&expectation.admissible, &show)
        ),
    )
    .with_note(note)
    .with_help(
        "change the parameters so that the figure falls in the interval, or update the \
         expectation if the model is right",
    )
}

/// An expectation's figure as the reader wrote it, with its time as written (the horizon
/// in clock units): `mean(r, 1 year)`, `prob(r < 0, 12 month)`, `yield(10 year)`.
fn describe_expectation(model: &Model, e: &Expectation) -> String {
    let clock = &model.clock.unit;
    let keyword = e.figure.keyword();
    let time = e.at.unwrap_or(model.horizon);
    let time_text = e
        .at_text
        .clone()
        .unwrap_or_else(|| format!("{} {clock}", significant_whole(time, 6)));
    let Some(state) = e.state else {
        return format!("{keyword}({time_text})");
    };
    let name = state_name(model, state);
    match (e.figure, e.level) {
        (Figure::Prob, Some(level)) => {
            let side = e.side.unwrap_or(Side::Below).symbol();
            format!(
                "{keyword}({name} {side} {}, {time_text})",
                e.level_shown.show(level)
            )
        }
        (Figure::Quantile, Some(p)) => {
            format!("{keyword}({name}, {}, {time_text})", e.level_shown.show(p))
        }
        (figure, _) if figure.takes_time() => format!("{keyword}({name}, {time_text})"),
        _ => format!("{keyword}({name})"),
    }
}

/// The admissible values as the reader wrote them: `< 10 day`, `≥ 0.5`, `in [2.5%, 2.6%]`.
fn expected_text(admissible: &Interval, show: &dyn Fn(f64) -> String) -> String {
    match (admissible.lower, admissible.upper) {
        (None, Some((u, inclusive))) => {
            format!("{} {}", if inclusive { "≤" } else { "<" }, show(u))
        }
        (Some((l, inclusive)), None) => {
            format!("{} {}", if inclusive { "≥" } else { ">" }, show(l))
        }
        _ => format!("in {}", show_interval_with(admissible, show)),
    }
}

/// A figure in the units the reader sees it in (the moments keep the messages' form).
fn show_figure(shown: &Shown, v: f64) -> String {
    match shown {
        Shown::Clock => significant_whole(v, 6),
        _ => shown.show(v),
    }
}

/// Why figures may have come out non-finite: a parameter so large that rates times time
/// overflow double precision (about 1.8e308). The numerical routines stop at the first
/// non-finite value and give no figure; this says which number to look at.
fn overflow_note(model: &Model) -> Option<String> {
    const HUGE: f64 = 1e100;
    let scale = model.horizon.abs().max(1.0);
    let largest = model
        .params
        .iter()
        .filter(|p| !p.value.is_finite() || p.value.abs() * scale >= HUGE)
        .max_by(|a, b| a.value.abs().total_cmp(&b.value.abs()))?;
    Some(format!(
        "the parameter `{}` = {} is too large for double precision: the figures overflow, so \
         none is given",
        largest.name,
        significant_whole(largest.value, 6)
    ))
}
