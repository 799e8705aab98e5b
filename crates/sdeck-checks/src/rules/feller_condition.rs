//! `feller-condition`: a square-root factor with 2·speed·level < vol², for which zero is
//! attainable; the boundary values of its parameters, computed once for the message and
//! the fixes.

use super::shared::param_literal;
use super::shared::{equation_span, state_name};
use super::Context;
use sdeck_calculus::describe::{square_root_terms, SquareRootTerms};
use sdeck_calculus::{Derivation, SquareRootParams};
use sdeck_diagnostics::{rules, Diagnostic, TextEdit};
use sdeck_semantics::{FactorId, Model, ParamId};
use sdeck_units::number::{round_significant, significant_whole};

/// The parameter values that meet the Feller condition 2·speed·level ≥ vol² for the
/// square-root factor `state`, each in its parameter's written unit and rounded to
/// three significant digits (up for the speed, down for the volatility) so that the
/// rounded value still meets it. The message of `feller-condition` and its quick fix
/// both write these numbers, to three significant digits ([`significant_whole`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FellerBounds {
    /// The speed's parameter and its least value.
    pub speed: Option<(ParamId, f64)>,
    /// The volatility's parameter and its greatest value.
    pub vol: Option<(ParamId, f64)>,
}

/// [`FellerBounds`] of factor `state`; `None` when it is not a square-root factor that
/// fails the condition with a positive level.
pub fn feller_bounds(
    model: &Model,
    derivation: &Derivation,
    state: FactorId,
) -> Option<FellerBounds> {
    let sr = derivation.states.by_id(state)?.square_root.as_ref()?;
    let vol_squared = sr.vol * sr.vol;
    if !(sr.level > 0.0 && sr.speed > 0.0 && vol_squared.is_finite())
        || 2.0 * sr.speed * sr.level >= vol_squared
    {
        return None;
    }
    let terms = square_root_terms(model, derivation, state);
    // How a parameter enters its coefficient (1 when the coefficient is the parameter).
    let written_per_clock = |p: ParamId, coefficient: f64| -> Option<(f64, f64)> {
        let param = model.params.by_id(p)?;
        let factor = coefficient / param.value;
        let per_written = factor * param.scale;
        (per_written.is_finite() && per_written > 0.0).then_some((per_written, param.written))
    };
    let speed = terms.as_ref().and_then(|t| t.speed_param).and_then(|p| {
        let (per_written, _) = written_per_clock(p, sr.speed)?;
        let meets = |w: f64| 2.0 * w * per_written * sr.level >= vol_squared;
        let value = rounded_meeting(vol_squared / (2.0 * sr.level) / per_written, true, meets)?;
        Some((p, value))
    });
    let vol = terms.as_ref().and_then(|t| t.vol_param).and_then(|p| {
        let (per_written, _) = written_per_clock(p, sr.vol)?;
        let meets = |w: f64| {
            let vol = w * per_written;
            2.0 * sr.speed * sr.level >= vol * vol
        };
        let value = rounded_meeting(
            (2.0 * sr.speed * sr.level).sqrt() / per_written,
            false,
            meets,
        )?;
        Some((p, value))
    });
    Some(FellerBounds { speed, vol })
}

/// `x` rounded to three significant digits in direction `up`, stepped on by one unit of
/// the third digit while `meets` fails (floating rounding at the boundary).
fn rounded_meeting(x: f64, up: bool, meets: impl Fn(f64) -> bool) -> Option<f64> {
    if !(x.is_finite() && x > 0.0) {
        return None;
    }
    let mut value = round_significant(x, 3, up);
    for _ in 0..4 {
        if meets(value) {
            return Some(value);
        }
        let step = 10f64.powi(value.abs().log10().floor() as i32 - 2);
        value = if up { value + step } else { value - step };
    }
    None
}

/// `feller-condition`: 2·speed·level < vol² makes zero attainable
/// (Feller 1951; Cox, Ingersoll & Ross 1985, §3).
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    for (state, law) in cx.derivation.states.iter_ids() {
        let Some(sr) = &law.square_root else {
            continue;
        };
        // Written as positive tests so that NaN never fires the rule.
        let violated = 2.0 * sr.speed * sr.level < sr.vol * sr.vol && sr.speed > 0.0;
        if violated {
            out.extend(finding(cx, state, sr));
        }
    }
}

/// The finding on the equation of the square-root factor `state` that fails the
/// condition: with the parameter values that meet it, and the fixes that write them.
fn finding(cx: &Context, state: FactorId, sr: &SquareRootParams) -> Option<Diagnostic> {
    let (model, derivation) = (cx.model, cx.derivation);
    let span = equation_span(model, state)?;
    let terms = square_root_terms(model, derivation, state);
    let (speed, level, vol2) = terms
        .as_ref()
        .map(|t| (t.speed.clone(), t.level.clone(), t.vol_squared.clone()))
        .unwrap_or_else(|| ("speed".into(), "level".into(), "vol²".into()));
    let clock = &model.clock.unit;
    let name = state_name(model, state);
    let (drift_side, vol_squared) = (2.0 * sr.speed * sr.level, sr.vol * sr.vol);
    let sides = format!(
        "2·{speed}·{level} = {} < {vol2} = {} (per {clock})",
        significant_whole(drift_side, 3),
        significant_whole(vol_squared, 3),
    );
    if sr.level <= 0.0 {
        return Some(
            Diagnostic::new(
                &rules::FELLER_CONDITION,
                span,
                format!(
                    "{sides}: the level of {name} is not above zero, so {name} is pulled to \
                     zero and stays near it; give it a positive level"
                ),
            )
            .with_help(format!("set {level} above zero")),
        );
    }
    let bounds = feller_bounds(model, derivation, state);
    let (raise, lower) = remedies(model, bounds.as_ref(), sr, &speed, &vol2);
    let mut diagnostic = Diagnostic::new(
        &rules::FELLER_CONDITION,
        span,
        format!("{sides}: zero is attainable for {name}"),
    )
    .with_label(format!("{name} can reach zero"))
    .with_help(format!("{raise}, or {lower}"))
    .with_note(
        "with 2·speed·level ≥ vol² a square-root process started above zero never \
         reaches zero; below it, zero is hit with positive probability",
    );
    if let (Some(bounds), Some(terms)) = (&bounds, &terms) {
        for (title, edit) in boundary_fixes(cx, bounds, terms) {
            diagnostic = diagnostic.with_fix(title, vec![edit]);
        }
    }
    Some(diagnostic)
}

/// The two remedies in words: raise the speed to its bound, lower the volatility to its
/// bound, naming the parameters when each coefficient is one parameter.
fn remedies(
    model: &Model,
    bounds: Option<&FellerBounds>,
    sr: &SquareRootParams,
    speed: &str,
    vol2: &str,
) -> (String, String) {
    let clock = &model.clock.unit;
    let param_name = |p: ParamId, or: &str| {
        model
            .params
            .by_id(p)
            .map(|p| p.name.clone())
            .unwrap_or_else(|| or.to_string())
    };
    let with_unit =
        |p: ParamId, value: f64| match model.params.by_id(p).and_then(|p| p.unit_text.as_ref()) {
            Some(unit) => format!("{} [{unit}]", significant_whole(value, 3)),
            None => significant_whole(value, 3),
        };
    let raise = match bounds.and_then(|b| b.speed) {
        Some((p, value)) => format!(
            "raise {} to at least {}",
            param_name(p, "the speed"),
            with_unit(p, value)
        ),
        None => format!(
            "raise the speed {speed} to at least {} per {clock}",
            significant_whole(
                round_significant(sr.vol * sr.vol / (2.0 * sr.level), 3, true),
                3
            )
        ),
    };
    let lower = match bounds.and_then(|b| b.vol) {
        Some((p, value)) => format!(
            "lower {} to at most {}",
            param_name(p, "the volatility"),
            with_unit(p, value)
        ),
        None => format!(
            "lower the volatility so that {vol2} is at most {}",
            significant_whole(round_significant(2.0 * sr.speed * sr.level, 3, false), 3)
        ),
    };
    (raise, lower)
}

/// The fixes that move the speed up (preferred), or the volatility down, to the bounds,
/// each replacing the number of the parameter's declaration, written like it.
fn boundary_fixes(
    cx: &Context,
    bounds: &FellerBounds,
    terms: &SquareRootTerms,
) -> Vec<(String, TextEdit)> {
    let wanted = [
        (bounds.speed, "Raise", "2·{speed}·{level} = {vol2}"),
        (bounds.vol, "Lower", "{vol2} = 2·{speed}·{level}"),
    ];
    let mut out = Vec::new();
    for (bound, verb, boundary) in wanted {
        let Some((p, value)) = bound else { continue };
        let Some(param) = cx.model.params.by_id(p) else {
            continue;
        };
        let Some(number) = param_literal(cx.analysis, &param.name) else {
            continue;
        };
        let text = written_like(&number.text, value);
        let boundary = boundary
            .replace("{speed}", &terms.speed)
            .replace("{level}", &terms.level)
            .replace("{vol2}", &terms.vol_squared);
        out.push((
            format!(
                "{verb} `{}` to {text} (Feller boundary: {boundary})",
                param.name
            ),
            TextEdit {
                span: number.span.clone(),
                new_text: text,
            },
        ));
    }
    out
}

/// A Feller bound written in the style of the literal it replaces (`%`, `bp` or plain),
/// with the digits of the diagnostic's message.
fn written_like(original: &str, value: f64) -> String {
    let (factor, suffix) = if original.ends_with('%') {
        (100.0, "%")
    } else if original.ends_with("bp") {
        (10_000.0, "bp")
    } else {
        (1.0, "")
    };
    format!("{}{suffix}", significant_whole(value * factor, 3))
}
