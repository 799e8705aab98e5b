//! `implausible-value`: values a model allows but a desk almost never means: a rate-like
//! factor with a volatility of thousands of percent, a half-life under a day or over a
//! century, a rate level above 50%, two distinct shocks correlated at exactly ±1. The
//! thresholds are facts of the trade (common practice, no source) and a project may move
//! them (`[plausibility]` in sdeck.toml).

use super::shared::{equation_span, param_literal, state_name};
use super::Context;
use sdeck_calculus::StateLaw;
use sdeck_diagnostics::{rules, Diagnostic, TextEdit};
use sdeck_semantics::{Correlations, FactorId, Model, ShockId};
use sdeck_units::number::significant_whole;

/// A dimensionless factor that starts within ±20% is read as a rate (a proportion such as
/// a utilisation starting at 50% is not): common practice, no source.
const RATE_LIKE_START: f64 = 0.2;

/// Thresholds of `implausible-value`, in years and fractions (2.0 is 200%).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Plausibility {
    /// Highest annualised volatility: absolute for a rate-like factor, relative for a
    /// factor whose diffusion is proportional to it.
    pub max_volatility: f64,
    /// Shortest and longest half-life, in years.
    pub min_half_life: f64,
    pub max_half_life: f64,
    /// Highest level a rate-like factor (dimensionless, starting within ±20%) reverts to.
    pub max_rate_level: f64,
}

impl Default for Plausibility {
    /// 200% a year, one day (1/365 year) to a century, 50%: common practice, no source.
    fn default() -> Self {
        Plausibility {
            max_volatility: 2.0,
            min_half_life: 1.0 / 365.0,
            max_half_life: 100.0,
            max_rate_level: 0.5,
        }
    }
}

pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    // Built once: the correlations of every factor's shocks are looked up in it.
    let corr = cx.model.correlations();
    for (index, law) in cx.derivation.states.iter_ids() {
        let Some(factor) = cx.model.factors.by_id(index) else {
            continue;
        };
        let Some(span) = equation_span(cx.model, index) else {
            continue;
        };
        let rate_like =
            factor.dimension.is_dimensionless() && factor.initial.abs() <= RATE_LIKE_START;
        volatility(cx, &corr, index, law, rate_like, span.clone(), out);
        half_life(cx, index, law, span.clone(), out);
        if rate_like {
            level(cx, index, law, span, out);
        }
    }
    correlations(cx, out);
}

/// Annualised volatility at the start: relative when the diffusion is proportional to the
/// factor, absolute for a rate-like factor; with the loadings (clock units) it rests on.
fn start_volatility(
    model: &Model,
    corr: &Correlations,
    law: &StateLaw,
    x0: f64,
    rate_like: bool,
) -> Option<(f64, bool, Vec<f64>)> {
    let per_year = |rate: f64| (rate / model.clock.years).sqrt();
    if let Some(lc) = &law.linear {
        let quadratic = |terms: &[(ShockId, f64)], shift: &dyn Fn(ShockId) -> f64| -> f64 {
            let mut sum = 0.0;
            for (k, a) in terms {
                for (l, b) in terms {
                    sum += corr.get(*k, *l) * (a + shift(*k)) * (b + shift(*l));
                }
            }
            sum
        };
        if lc.c.is_empty() && !lc.d.is_empty() {
            let rate = quadratic(&lc.d, &|_| 0.0);
            return Some((
                per_year(rate.max(0.0)),
                true,
                lc.d.iter().map(|(_, d)| *d).collect(),
            ));
        }
        if rate_like && lc.d.is_empty() && !lc.c.is_empty() {
            let rate = quadratic(&lc.c, &|_| 0.0);
            return Some((
                per_year(rate.max(0.0)),
                false,
                lc.c.iter().map(|(_, c)| *c).collect(),
            ));
        }
        return None;
    }
    let sr = law.square_root.as_ref()?;
    rate_like.then(|| (per_year(sr.vol * sr.vol * x0.max(0.0)), false, vec![sr.vol]))
}

/// A fix that appends `%` to the literal of the one parameter, written as a plain number,
/// whose value is `value` (clock units): the usual slip behind an implausible figure.
fn percent_fix(cx: &Context, values: &[f64]) -> Option<(String, TextEdit)> {
    let mut found = None;
    for param in &cx.model.params {
        if !values
            .iter()
            .any(|v| *v != 0.0 && ((param.value.abs() - v.abs()) / v.abs()).abs() < 1e-12)
        {
            continue;
        }
        let Some(literal) = param_literal(cx.analysis, &param.name) else {
            continue;
        };
        if literal.text.ends_with('%') || literal.text.ends_with("bp") {
            continue;
        }
        if found.is_some() {
            return None;
        }
        found = Some((
            format!("Write `{}` as `{}%`", param.name, literal.text),
            TextEdit {
                span: literal.span.clone(),
                new_text: format!("{}%", literal.text),
            },
        ));
    }
    found
}

fn volatility(
    cx: &Context,
    corr: &Correlations,
    index: FactorId,
    law: &StateLaw,
    rate_like: bool,
    span: std::ops::Range<usize>,
    out: &mut Vec<Diagnostic>,
) {
    let limit = cx.plausibility.max_volatility;
    let Some(x0) = cx.model.factors.by_id(index).map(|f| f.initial) else {
        return;
    };
    let Some((vol, relative, loadings)) = start_volatility(cx.model, corr, law, x0, rate_like)
    else {
        return;
    };
    // An overflowing figure (a parameter near 1e308) says nothing about a slip of units.
    if !vol.is_finite() || vol <= limit {
        return;
    }
    let name = state_name(cx.model, index);
    let what = if relative {
        "relative volatility"
    } else {
        "volatility"
    };
    let mut diagnostic = Diagnostic::new(
        &rules::IMPLAUSIBLE_VALUE,
        span,
        format!(
            "the {what} of {name} at its start is {}% a year, above the {}% a desk plausibly \
             means: an sd of {} after one year{}",
            significant_whole(vol * 100.0, 4),
            significant_whole(limit * 100.0, 4),
            significant_whole(vol, 4),
            if relative { " in log terms" } else { "" }
        ),
    )
    .with_help(
        "a volatility quoted in % without the `%` (or per day for a per-year figure) gives \
         this; write the volatility as the desk quotes it, e.g. `0.9%`, or raise \
         `max-volatility` in [plausibility] of sdeck.toml if it is meant",
    );
    if let Some((title, edit)) = percent_fix(cx, &loadings) {
        diagnostic = diagnostic.with_fix(title, vec![edit]);
    }
    out.push(diagnostic);
}

fn half_life(
    cx: &Context,
    index: FactorId,
    law: &StateLaw,
    span: std::ops::Range<usize>,
    out: &mut Vec<Diagnostic>,
) {
    let Some(h) = law.half_life else { return };
    let years = h * cx.model.clock.years;
    let limits = &cx.plausibility;
    let name = state_name(cx.model, index);
    let (shown, side, bound) = if years < limits.min_half_life {
        (
            format!("{} day", significant_whole(years * 365.0, 4)),
            "under",
            format!("{} day", significant_whole(limits.min_half_life * 365.0, 4)),
        )
    } else if years > limits.max_half_life {
        (
            format!("{} year", significant_whole(years, 4)),
            "over",
            format!("{} year", significant_whole(limits.max_half_life, 4)),
        )
    } else {
        return;
    };
    out.push(
        Diagnostic::new(
            &rules::IMPLAUSIBLE_VALUE,
            span,
            format!(
                "the half-life of {name} is {shown}, {side} the {bound} a desk plausibly \
                 means (ln 2 over the speed of mean reversion)"
            ),
        )
        .with_help(
            "check the unit of the speed (per day against per year) and its size; raise or \
             lower `min-half-life`/`max-half-life` in [plausibility] of sdeck.toml if it \
             is meant",
        ),
    );
}

fn level(
    cx: &Context,
    index: FactorId,
    law: &StateLaw,
    span: std::ops::Range<usize>,
    out: &mut Vec<Diagnostic>,
) {
    let limit = cx.plausibility.max_rate_level;
    let Some(stationary) = &law.stationary else {
        return;
    };
    let level = stationary.mean;
    if !level.is_finite() || level.abs() <= limit {
        return;
    }
    let name = state_name(cx.model, index);
    let mut diagnostic = Diagnostic::new(
        &rules::IMPLAUSIBLE_VALUE,
        span,
        format!(
            "the level {name} reverts to is {}%, above the {}% a rate plausibly reaches, \
             while {name} starts at {}%",
            significant_whole(level * 100.0, 4),
            significant_whole(limit * 100.0, 4),
            significant_whole(
                cx.model.factors.by_id(index).map_or(0.0, |f| f.initial) * 100.0,
                4
            )
        ),
    )
    .with_help(
        "a level written as a plain number where a percentage was meant (`4` for `4%`) gives \
         this; raise `max-rate-level` in [plausibility] of sdeck.toml if it is meant",
    );
    if let Some((title, edit)) = percent_fix(cx, &[level]) {
        diagnostic = diagnostic.with_fix(title, vec![edit]);
    }
    out.push(diagnostic);
}

fn correlations(cx: &Context, out: &mut Vec<Diagnostic>) {
    for c in &cx.model.correlations {
        if c.first == c.second || (c.value.abs() - 1.0).abs() > 1e-12 {
            continue;
        }
        let shock = |k: ShockId| cx.model.shocks.by_id(k).map_or("?", |s| s.name.as_str());
        let (first, second) = (shock(c.first), shock(c.second));
        let sign = if c.value > 0.0 { "+1" } else { "−1" };
        let instead = if c.value > 0.0 {
            format!("write `d{first}` where `d{second}` is used")
        } else {
            format!("write `-d{first}` where `d{second}` is used")
        };
        out.push(
            Diagnostic::new(
                &rules::IMPLAUSIBLE_VALUE,
                c.span.clone(),
                format!(
                    "{first} and {second} are correlated at exactly {sign}: two shocks that \
                     move as one are one shock, and the correlation matrix is singular"
                ),
            )
            .with_help(format!(
                "if they are one shock, {instead} and drop `{second}`; otherwise use the \
                 correlation the data gives (below 1 in size)"
            )),
        );
    }
}
