//! Checks that need the calculus: Feller condition, state domains, explosive drifts,
//! consistency of the correlations and pinned expectations on derived figures.

use nalgebra::{DMatrix, SymmetricEigen};
use sdeck_calculus::algebra::to_poly;
use sdeck_calculus::describe::square_root_terms;
use sdeck_calculus::{expectation_value, Derivation, Family, StateLaw};
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_semantics::{Expectation, Expr, Function, Interval, Model, Shown};
use sdeck_syntax::ast::{Figure, Side};

/// Eigenvalues above this negative tolerance count as zero (rounding of a PSD matrix).
const EIGENVALUE_TOLERANCE: f64 = 1e-12;

/// Every diagnostic that follows from the derivation of `model`.
pub fn derived_checks(model: &Model, derivation: &Derivation) -> Vec<Diagnostic> {
    let mut out = Vec::new();
    feller_condition(model, derivation, &mut out);
    factor_domain(model, derivation, &mut out);
    not_mean_reverting(model, derivation, &mut out);
    moment_explosion(model, derivation, &mut out);
    discount_measure(model, &mut out);
    correlation_not_psd(model, &mut out);
    expectations(model, derivation, &mut out);
    out
}

/// A `discount` rate whose drifts are not stated to be risk-neutral.
fn discount_measure(model: &Model, out: &mut Vec<Diagnostic>) {
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

/// A price whose second moment becomes infinite before the horizon.
fn moment_explosion(model: &Model, derivation: &Derivation, out: &mut Vec<Diagnostic>) {
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
                    number(time, 4),
                    number(horizon, 4)
                ),
            )
            .with_help(
                "lower the volatility of the factor that drives the variance, make its \
                 correlation with the price smaller or negative, or shorten the horizon",
            ),
        );
    }
}

/// A number with `digits` significant digits, trailing zeros dropped.
fn number(x: f64, digits: i32) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let magnitude = x.abs().log10().floor() as i32;
    if !(-5..=8).contains(&magnitude) {
        return format!("{:.*e}", (digits - 1).max(0) as usize, x);
    }
    let decimals = (digits - 1 - magnitude).max(0) as usize;
    let text = format!("{x:.decimals$}");
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

/// Rounds up (`up`) or down to `digits` significant digits.
fn round_significant(x: f64, digits: i32, up: bool) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    let magnitude = x.abs().log10().floor() as i32;
    let factor = 10f64.powi(digits - 1 - magnitude);
    let scaled = x * factor;
    let rounded = if up { scaled.ceil() } else { scaled.floor() };
    rounded / factor
}

/// The parameter values that meet the Feller condition 2·speed·level ≥ vol² for the
/// square-root factor `state`, each in its parameter's written unit and rounded to
/// three significant digits (up for the speed, down for the volatility) so that the
/// rounded value still meets it. The message of `feller-condition` and its quick fix
/// both write these numbers, through [`feller_number`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FellerBounds {
    /// The speed's parameter and its least value.
    pub speed: Option<(usize, f64)>,
    /// The volatility's parameter and its greatest value.
    pub vol: Option<(usize, f64)>,
}

/// [`FellerBounds`] of factor `state`; `None` when it is not a square-root factor that
/// fails the condition with a positive level.
pub fn feller_bounds(model: &Model, derivation: &Derivation, state: usize) -> Option<FellerBounds> {
    let sr = derivation.states.get(state)?.square_root.as_ref()?;
    let vol_squared = sr.vol * sr.vol;
    if !(sr.level > 0.0 && sr.speed > 0.0 && vol_squared.is_finite())
        || 2.0 * sr.speed * sr.level >= vol_squared
    {
        return None;
    }
    let terms = square_root_terms(model, derivation, state);
    // How a parameter enters its coefficient (1 when the coefficient is the parameter).
    let written_per_clock = |p: usize, coefficient: f64| -> Option<(f64, f64)> {
        let param = model.params.get(p)?;
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

/// A Feller bound as the message and the quick fix write it (three significant digits).
pub fn feller_number(x: f64) -> String {
    number(x, 3)
}

fn state_name(model: &Model, state: usize) -> String {
    model
        .factors
        .get(state)
        .map(|s| s.name.clone())
        .unwrap_or_default()
}

fn equation_span(model: &Model, state: usize) -> Option<std::ops::Range<usize>> {
    model
        .factors
        .get(state)?
        .equation
        .as_ref()
        .map(|e| e.span.clone())
}

/// `feller-condition`: 2·speed·level < vol² makes zero attainable
/// (Feller 1951; Cox, Ingersoll & Ross 1985, §3).
fn feller_condition(model: &Model, derivation: &Derivation, out: &mut Vec<Diagnostic>) {
    for (state, law) in derivation.states.iter().enumerate() {
        let Some(sr) = &law.square_root else {
            continue;
        };
        let drift_side = 2.0 * sr.speed * sr.level;
        let vol_squared = sr.vol * sr.vol;
        // Written as positive tests so that NaN never fires the rule.
        let violated = drift_side < vol_squared && sr.speed > 0.0;
        if !violated {
            continue;
        }
        let Some(span) = equation_span(model, state) else {
            continue;
        };
        let terms = square_root_terms(model, derivation, state);
        let (speed, level, vol2) = terms
            .as_ref()
            .map(|t| (t.speed.clone(), t.level.clone(), t.vol_squared.clone()))
            .unwrap_or_else(|| ("speed".into(), "level".into(), "vol²".into()));
        let clock = &model.clock.unit;
        if sr.level <= 0.0 {
            let name = state_name(model, state);
            out.push(
                Diagnostic::new(
                    &rules::FELLER_CONDITION,
                    span,
                    format!(
                        "2·{speed}·{level} = {} < {vol2} = {} (per {clock}): the level of {name} \
                         is not above zero, so {name} is pulled to zero and stays near it; \
                         give it a positive level",
                        number(drift_side, 3),
                        number(vol_squared, 3),
                    ),
                )
                .with_help(format!("set {level} above zero")),
            );
            continue;
        }
        let bounds = feller_bounds(model, derivation, state);
        let param_name = |p: usize, or: &str| {
            model
                .params
                .get(p)
                .map(|p| p.name.clone())
                .unwrap_or_else(|| or.to_string())
        };
        let with_unit =
            |p: usize, value: f64| match model.params.get(p).and_then(|p| p.unit_text.as_ref()) {
                Some(unit) => format!("{} [{unit}]", feller_number(value)),
                None => feller_number(value),
            };
        let raise = match bounds.as_ref().and_then(|b| b.speed) {
            Some((p, value)) => format!(
                "raise {} to at least {}",
                param_name(p, "the speed"),
                with_unit(p, value)
            ),
            None => format!(
                "raise the speed {speed} to at least {} per {clock}",
                feller_number(round_significant(vol_squared / (2.0 * sr.level), 3, true))
            ),
        };
        let lower = match bounds.as_ref().and_then(|b| b.vol) {
            Some((p, value)) => format!(
                "lower {} to at most {}",
                param_name(p, "the volatility"),
                with_unit(p, value)
            ),
            None => format!(
                "lower the volatility so that {vol2} is at most {}",
                feller_number(round_significant(drift_side, 3, false))
            ),
        };
        let name = state_name(model, state);
        let message = format!(
            "2·{speed}·{level} = {} < {vol2} = {} (per {clock}): zero is attainable for {name}",
            number(drift_side, 3),
            number(vol_squared, 3),
        );
        let diagnostic = Diagnostic::new(&rules::FELLER_CONDITION, span, message)
            .with_label(format!("{name} can reach zero"))
            .with_help(format!("{raise}, or {lower}"))
            .with_note(
                "with 2·speed·level ≥ vol² a square-root process started above zero never \
                 reaches zero; below it, zero is hit with positive probability",
            );
        out.push(diagnostic);
    }
}

/// Whether a square-root state fails the Feller condition (zero is attainable).
fn square_root_reaches_zero(law: &StateLaw) -> bool {
    law.square_root
        .as_ref()
        .is_some_and(|sr| 2.0 * sr.speed * sr.level < sr.vol * sr.vol)
}

/// Applications of sqrt, log or a half power to an expression mentioning states.
fn restricted_calls<'e>(expr: &'e Expr, out: &mut Vec<(&'static str, &'e Expr)>) {
    match expr {
        Expr::Call(Function::Sqrt, args) => {
            args.iter().for_each(|a| out.push(("sqrt", a)));
            args.iter().for_each(|a| restricted_calls(a, out));
        }
        Expr::Call(Function::Log, args) => {
            args.iter().for_each(|a| out.push(("log", a)));
            args.iter().for_each(|a| restricted_calls(a, out));
        }
        Expr::Call(_, args) => args.iter().for_each(|a| restricted_calls(a, out)),
        Expr::Pow(base, exponent) => {
            if let Expr::Const(e) = **exponent {
                if e.fract() != 0.0 {
                    out.push(("sqrt", base));
                }
            }
            restricted_calls(base, out);
            restricted_calls(exponent, out);
        }
        Expr::Neg(a) => restricted_calls(a, out),
        Expr::Add(a, b) | Expr::Sub(a, b) | Expr::Mul(a, b) | Expr::Div(a, b) => {
            restricted_calls(a, out);
            restricted_calls(b, out);
        }
        _ => {}
    }
}

/// `factor-domain`: sqrt/log of a state whose law leaves the domain, declared bounds a
/// family cannot keep, impossible starts.
fn factor_domain(model: &Model, derivation: &Derivation, out: &mut Vec<Diagnostic>) {
    // (a) sqrt or log of a Gaussian state.
    for (owner, state) in model.factors.iter().enumerate() {
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
                let Some(law) = derivation.states.get(gaussian) else {
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
        let _ = owner;
    }
    // (b), (c), (d): bounds and starts.
    for (index, law) in derivation.states.iter().enumerate() {
        let Some(state) = model.factors.get(index) else {
            continue;
        };
        let name = &state.name;
        let x0 = state.initial;
        match law.family {
            Family::GeometricBrownian if x0 <= 0.0 => {
                let what = if x0 == 0.0 {
                    "stays at zero forever"
                } else {
                    "stays negative"
                };
                out.push(
                    Diagnostic::new(
                        &rules::FACTOR_DOMAIN,
                        state.span.clone(),
                        format!(
                            "{name} is geometric-brownian and starts at {}: it {what}, since a \
                             proportional diffusion keeps the sign of its start",
                            number(state.written, 4)
                        ),
                    )
                    .with_help(format!("start {name} at a positive value")),
                );
                continue;
            }
            Family::SquareRoot if x0 < 0.0 => {
                out.push(
                    Diagnostic::new(
                        &rules::FACTOR_DOMAIN,
                        state.span.clone(),
                        format!(
                            "{name} is square-root and starts at {}: sqrt({name}) is undefined \
                             below zero",
                            number(state.written, 4)
                        ),
                    )
                    .with_help(format!("start {name} at zero or above")),
                );
                continue;
            }
            _ => {}
        }
        if !state.has_domain {
            continue;
        }
        let support = match law.family {
            Family::GeometricBrownian if x0 > 0.0 => Some((Some((0.0, false)), "(0, ∞)")),
            Family::SquareRoot => Some((Some((0.0, true)), "[0, ∞)")),
            _ if law.is_gaussian_with_noise() => Some((None, "the whole real line")),
            _ => None,
        };
        let Some((lower, support_text)) = support else {
            continue;
        };
        if interval_keeps(&state.domain, lower) {
            continue;
        }
        let keep = match law.family {
            Family::OrnsteinUhlenbeck | Family::ArithmeticBrownian | Family::Linear => format!(
                "use a square-root diffusion (`vol * sqrt({name}) dW`) to keep {name} ≥ 0, or \
                 drop the bound"
            ),
            _ => "widen the bound to the support of the law, or drop it".to_string(),
        };
        out.push(
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
        );
    }
}

fn state_span(model: &Model, state: usize) -> std::ops::Range<usize> {
    model
        .factors
        .get(state)
        .map(|s| s.name_span.clone())
        .unwrap_or(0..0)
}

/// Whether `domain` contains the support `[lower, ∞)` (or `(lower, ∞)`, or ℝ when
/// `lower` is `None`).
fn interval_keeps(domain: &Interval, lower: Option<(f64, bool)>) -> bool {
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

fn show_interval(interval: &Interval) -> String {
    show_interval_with(interval, |v| number(v, 6))
}

/// An interval with its ends shown by `show`.
fn show_interval_with(interval: &Interval, show: impl Fn(f64) -> String) -> String {
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

/// `not-mean-reverting`: a positive linear coefficient in a mean-reverting family, or an
/// eigenvalue of a coupled drift matrix with positive real part.
fn not_mean_reverting(model: &Model, derivation: &Derivation, out: &mut Vec<Diagnostic>) {
    let clock = &model.clock.unit;
    for (index, law) in derivation.states.iter().enumerate() {
        let eligible = match law.family {
            Family::OrnsteinUhlenbeck => true,
            Family::Linear => law.linear.as_ref().is_some_and(|lc| lc.d.is_empty()),
            Family::SquareRoot => true,
            _ => false,
        };
        if !eligible {
            continue;
        }
        let b = match (&law.linear, &law.square_root) {
            (Some(lc), _) => lc.b,
            (None, Some(sr)) => -sr.speed,
            _ => continue,
        };
        let explosive = b > 0.0;
        if !explosive {
            continue;
        }
        let Some(span) = equation_span(model, index) else {
            continue;
        };
        let name = state_name(model, index);
        let slope = sdeck_calculus::describe::drift_slope_text(model, derivation, index)
            .unwrap_or_else(|| "b".to_string());
        let doubling = std::f64::consts::LN_2 / b;
        out.push(
            Diagnostic::new(
                &rules::NOT_MEAN_REVERTING,
                span,
                format!(
                    "the drift of {name} pushes away from its level: the coefficient of {name} \
                     is {slope} = +{} per {clock} (> 0), so deviations double every {} {clock}s \
                     (ln 2/{})",
                    number(b, 4),
                    number(doubling, 3),
                    number(b, 4)
                ),
            )
            .with_help(format!(
                "make the coefficient of {name} negative, e.g. write `kappa * (level - {name})` \
                 with kappa > 0"
            )),
        );
    }
    // Coupled states: eigenvalues of each connected block's drift matrix.
    for coupled in &derivation.blocks {
        let block = &coupled.states;
        // A factor carried by its logarithm, or a polynomial system, grows as its own
        // family says (`moment-explosion` speaks of it): only linear blocks are judged here.
        let nonlinear = block.iter().any(|&i| {
            derivation.states.get(i).is_some_and(|law| {
                matches!(law.family, Family::ExponentialAffine | Family::Polynomial)
            })
        });
        if nonlinear {
            continue;
        }
        let Some(eigen) = &coupled.drift_eigenvalues else {
            continue;
        };
        let Some(&(re, im)) = eigen
            .iter()
            .max_by(|x, y| x.0.partial_cmp(&y.0).unwrap_or(std::cmp::Ordering::Equal))
        else {
            continue;
        };
        let explosive = re > 0.0;
        if !explosive {
            continue;
        }
        let names: Vec<String> = block.iter().map(|i| state_name(model, *i)).collect();
        let Some(&first) = block.first() else {
            continue;
        };
        let Some(span) = equation_span(model, first) else {
            continue;
        };
        let eigen_text = if im != 0.0 {
            format!("{} ± {}i", number(re, 4), number(im.abs(), 4))
        } else {
            number(re, 4)
        };
        let mut diagnostic = Diagnostic::new(
            &rules::NOT_MEAN_REVERTING,
            span,
            format!(
                "the coupled drift of {} is explosive: its drift matrix has the eigenvalue {} \
                 per {clock} with positive real part, so deviations double every {} {clock}s \
                 (ln 2/{})",
                names.join(", "),
                eigen_text,
                number(std::f64::consts::LN_2 / re, 3),
                number(re, 4)
            ),
        )
        .with_help(
            "make every eigenvalue of the drift matrix negative: strengthen the reversion \
             (more negative own coefficients) or weaken the cross terms",
        );
        for other in block.iter().skip(1) {
            if let Some(span) = equation_span(model, *other) {
                diagnostic = diagnostic.with_related(span, "coupled equation");
            }
        }
        out.push(diagnostic);
    }
}

/// `correlation-not-psd`: the correlation matrix must be positive semi-definite for the
/// noises to exist jointly.
fn correlation_not_psd(model: &Model, out: &mut Vec<Diagnostic>) {
    let Some(first) = model.correlations.first() else {
        return;
    };
    // The matrix is block diagonal: ones for the uncorrelated noises and one block per
    // group of correlated noises. Its eigenvalues are those of the blocks, so only the
    // blocks are decomposed (thousands of noises with one `corr` cost nothing).
    let correlations = model.correlations();
    let mut smallest = f64::INFINITY;
    for block in correlations.blocks() {
        let n = block.len();
        let matrix = DMatrix::from_fn(n, n, |r, c| correlations.get(block[r], block[c]));
        if matrix.iter().any(|v| !v.is_finite()) {
            return;
        }
        let eigen = SymmetricEigen::new(matrix);
        smallest = eigen.eigenvalues.iter().copied().fold(smallest, f64::min);
    }
    let negative = smallest < -EIGENVALUE_TOLERANCE;
    if !negative {
        return;
    }
    let mut diagnostic = Diagnostic::new(
        &rules::CORRELATION_NOT_PSD,
        first.span.clone(),
        format!(
            "the correlations of the shocks contradict each other: their matrix has the \
             eigenvalue {} < 0, so no set of Brownian motions has these correlations",
            number(smallest, 4)
        ),
    )
    .with_help(
        "bring the correlations closer to zero (for three shocks, two strong positive \
         correlations force the third to be positive too)",
    );
    for other in model.correlations.iter().skip(1) {
        diagnostic = diagnostic.with_related(other.span.clone(), "also part of the matrix");
    }
    for c in &model.correlations {
        match &c.expr {
            None => {}
            Some(sdeck_semantics::Expr::Param(p)) => {
                let name = model.params.get(*p).map_or("?", |p| p.name.as_str());
                diagnostic = diagnostic.with_note(format!(
                    "the correlation of `{}` and `{}` is the parameter `{name}` = {}: mend its value",
                    shock_name(model, c.first),
                    shock_name(model, c.second),
                    number(c.value, 4)
                ));
            }
            Some(_) => {
                diagnostic = diagnostic.with_note(format!(
                    "the correlation of `{}` and `{}` is written as an expression ({}); no \
                     quick fix rewrites an expression: mend the parameters it uses",
                    shock_name(model, c.first),
                    shock_name(model, c.second),
                    number(c.value, 4)
                ));
            }
        }
    }
    out.push(diagnostic);
}

fn shock_name(model: &Model, i: usize) -> &str {
    model.shocks.get(i).map_or("?", |s| s.name.as_str())
}

/// `expectation-failed`: a pinned figure outside its admissible interval, or a figure
/// that does not exist for the state's family.
fn expectations(model: &Model, derivation: &Derivation, out: &mut Vec<Diagnostic>) {
    let clock = &model.clock.unit;
    for expectation in &model.expectations {
        let law = match expectation.state {
            Some(state) => match derivation.states.get(state) {
                Some(law) => Some(law),
                None => continue,
            },
            None => None,
        };
        let described = describe_expectation(model, expectation);
        let value = expectation_value(model, derivation, expectation);
        let show = |v: f64| show_figure(&expectation.shown, v);
        match (value, law) {
            (Err(reason), _) if expectation.figure.on_curve() => {
                let help = if model.discount.is_none() {
                    "add the short rate, affine in the factors, e.g. `discount r`, or remove \
                     the expectation"
                } else {
                    "the rate must be affine in the factors and its transform finite up to \
                     the maturity; pin a shorter maturity or remove the expectation"
                };
                out.push(
                    Diagnostic::new(
                        &rules::EXPECTATION_FAILED,
                        expectation.span.clone(),
                        format!("{described} does not exist: {reason}"),
                    )
                    .with_help(help),
                );
            }
            (Err(reason), Some(law)) => {
                let why = match expectation.figure {
                    Figure::Halflife => {
                        "no half-life (that needs a constant negative slope of its own drift)"
                    }
                    Figure::StationaryMean | Figure::StationaryVariance | Figure::StationarySd => {
                        "no stationary law"
                    }
                    _ => reason.as_str(),
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
                out.push(d);
            }
            (Err(_), None) => {}
            (Ok(v), _) if !expectation.admissible.contains(v) => {
                let note = match (&expectation.shown, law) {
                    (Shown::Clock, Some(law)) => format!(
                        "figures are in clock units ({clock}); derived by {}",
                        law.method.as_str()
                    ),
                    (_, Some(law)) => format!("derived by {}", law.method.as_str()),
                    (_, None) => "yields and forwards are continuously compounded annual \
                                  rates; derived from the `discount` rate"
                        .to_string(),
                };
                out.push(
                    Diagnostic::new(
                        &rules::EXPECTATION_FAILED,
                        expectation.span.clone(),
                        format!(
                            "{described} = {} is outside the expected {}",
                            show(v),
                            show_interval_with(&expectation.admissible, show)
                        ),
                    )
                    .with_note(note)
                    .with_help(
                        "change the parameters so that the figure falls in the interval, or \
                         update the expectation if the model is right",
                    ),
                );
            }
            (Ok(_), _) => {}
        }
    }
}

/// An expectation's figure as the reader wrote it, with the times in clock units:
/// `mean(r, 12 month)`, `prob(r < 0, 12 month)`, `yield(120 month)`.
fn describe_expectation(model: &Model, e: &Expectation) -> String {
    let clock = &model.clock.unit;
    let keyword = e.figure.keyword();
    let time = e.at.unwrap_or(model.horizon);
    let time_text = format!("{} {clock}", number(time, 6));
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

/// A figure in the units the reader sees it in (the moments keep the messages' form).
fn show_figure(shown: &Shown, v: f64) -> String {
    match shown {
        Shown::Clock => number(v, 6),
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
        number(largest.value, 6)
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use sdeck_calculus::{derive, moments_at};
    use sdeck_diagnostics::Rule;

    fn run(source: &str) -> (Model, Vec<Diagnostic>) {
        let analysis = sdeck_semantics::analyze(source, "test_model");
        let model = analysis.model;
        let derivation = derive(&model);
        let diagnostics = derived_checks(&model, &derivation);
        (model, diagnostics)
    }

    fn of_rule<'d>(diagnostics: &'d [Diagnostic], rule: &Rule) -> Vec<&'d Diagnostic> {
        diagnostics.iter().filter(|d| d.rule == rule.name).collect()
    }

    #[test]
    fn a_rate_that_overflows_ends_quickly_and_says_why() {
        // Once 263 s of squaring in the matrix exponential; now no figure, and a note
        // naming the parameter.
        let (_, diagnostics) = run("clock year\nhorizon 1 year\nparam k = 1e308 [1/year]\n\
             param s = 0.1 [1/sqrt(year)]\nshock W\nshock V\nfactor x = 1\nfactor y = 1\n\
             dx = k * (y - x) dt + s dW\ndy = k * (x - y) dt + s dV\n\
             expect mean(x, 1 year) in [0, 2]\n");
        let found = of_rule(&diagnostics, &rules::EXPECTATION_FAILED);
        assert_eq!(found.len(), 1, "{diagnostics:?}");
        assert!(
            found[0].notes.iter().any(|n| n.contains("`k`")),
            "{:?}",
            found[0]
        );
    }

    #[test]
    fn manual_examples_fire_exactly_once_and_their_fixes_not_at_all() {
        let mine = [
            &rules::FELLER_CONDITION,
            &rules::FACTOR_DOMAIN,
            &rules::NOT_MEAN_REVERTING,
            &rules::CORRELATION_NOT_PSD,
            &rules::EXPECTATION_FAILED,
            &rules::MOMENT_EXPLOSION,
            &rules::DISCOUNT_MEASURE,
        ];
        for rule in mine {
            let (_, flawed) = run(rule.flawed);
            assert_eq!(
                of_rule(&flawed, rule).len(),
                1,
                "{} on its flawed example: {flawed:#?}",
                rule.name
            );
            let (_, fixed) = run(rule.fixed);
            assert!(
                of_rule(&fixed, rule).is_empty(),
                "{} on its fixed example: {fixed:#?}",
                rule.name
            );
        }
    }

    #[test]
    fn moment_explosion_gives_the_time_from_which_the_variance_is_infinite() {
        let (model, diagnostics) = run(rules::MOMENT_EXPLOSION.flawed);
        let found = of_rule(&diagnostics, &rules::MOMENT_EXPLOSION);
        assert_eq!(found.len(), 1);
        // Andersen & Piterbarg 2007, Prop. 3.1 with κ = 0.5, ξ = 0.3, ρ = 0.9, u = 2:
        // k = ρξu − κ = 0.04, D = k² − 2ξ² = −0.1784, T* = (2/√−D)·arctan(√−D/k).
        let root = 0.1784f64.sqrt();
        let expected = 2.0 / root * (root / 0.04).atan();
        assert!(
            found[0].message.contains(&number(expected, 4)),
            "{}",
            found[0].message
        );
        // Past that time the variance is reported infinite, and before it finite.
        let derivation = sdeck_calculus::derive(&model);
        let after = moments_at(&model, &derivation, expected + 0.5);
        let from = after.variance_infinite_from[0].expect("infinite");
        assert!((from - expected).abs() < 1e-8, "{from} vs {expected}");
        assert_eq!(after.variance[0], None);
        let before = moments_at(&model, &derivation, expected - 0.5);
        assert!(before.variance[0].is_some_and(f64::is_finite));
        assert_eq!(before.variance_infinite_from[0], None);
    }

    #[test]
    fn feller_message_states_both_sides_and_the_mend() {
        // 2·0.5·0.0576 = 0.0576 < 0.3² = 0.09; raising kappa needs 0.09/(2·0.0576) =
        // 0.78125, lowering vol needs √0.0576 = 0.24.
        let source = "model pike\nparam kappa = 0.5 [1/year] > 0\nparam level = 5.76%\n\
                      param vol = 0.3 [1/sqrt(year)] > 0\nshock W\nfactor r = 2%\n\
                      dr = kappa * (level - r) dt + vol * sqrt(r) dW\n";
        let (model, diagnostics) = run(source);
        let feller = of_rule(&diagnostics, &rules::FELLER_CONDITION);
        assert_eq!(feller.len(), 1, "{diagnostics:#?}");
        let message = &feller[0].message;
        assert!(
            message.starts_with("2·kappa·level = 0.0576 < vol² = 0.09 (per year)"),
            "{message}"
        );
        // The mend is the help, not repeated in the message.
        let help = feller[0].help.clone().unwrap_or_default();
        assert!(!message.contains("raise"), "{message}");
        assert!(
            help.contains("raise kappa to at least 0.782 [1/year]"),
            "{help}"
        );
        assert!(
            help.contains("lower vol to at most 0.24 [1/sqrt(year)]"),
            "{help}"
        );
        let equation = model.factors[0].equation.as_ref().expect("equation");
        assert_eq!(feller[0].span, equation.span);
    }

    #[test]
    fn feller_suggestion_is_in_the_written_unit() {
        // vol written per sqrt(day): the clock value is vol·√365, and the suggestion must
        // be converted back.
        let source = "model pike\nparam kappa = 0.5 [1/year] > 0\nparam level = 5.76%\n\
                      param vol = 0.0157 [1/sqrt(day)] > 0\nshock W\nfactor r = 2%\n\
                      dr = kappa * (level - r) dt + vol * sqrt(r) dW\n";
        let (_, diagnostics) = run(source);
        let feller = of_rule(&diagnostics, &rules::FELLER_CONDITION);
        assert_eq!(feller.len(), 1);
        // √0.0576 / √365 = 0.012562...
        let help = feller[0].help.clone().unwrap_or_default();
        assert!(
            help.contains("lower vol to at most 0.0125 [1/sqrt(day)]"),
            "{help}"
        );
    }

    #[test]
    fn gaussian_state_under_a_square_root_is_reported() {
        let source = "model marl\nparam k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\n\
                      shock W, Z\nfactor r = 0.02\nfactor y = 1\n\
                      dr = -k * r dt + v dW\ndy = -k * y dt + v * sqrt(r) dZ\n";
        let (model, diagnostics) = run(source);
        let domain = of_rule(&diagnostics, &rules::FACTOR_DOMAIN);
        assert_eq!(domain.len(), 1, "{diagnostics:#?}");
        assert!(
            domain[0].message.contains("`sqrt` of r"),
            "{}",
            domain[0].message
        );
        let equation = model.factors[1].equation.as_ref().expect("equation");
        assert_eq!(domain[0].span, equation.span);
    }

    #[test]
    fn log_of_a_square_root_state_that_reaches_zero() {
        // 2·0.5·0.02 = 0.02 < 0.2² = 0.04: zero is attainable, so log(v) is not safe.
        let source = "model fenby\nparam k = 0.5 [1/year]\nparam m = 0.02\n\
                      param s = 0.2 [1/sqrt(year)]\nparam c = 0.1 [1/sqrt(year)]\n\
                      shock W, Z\nfactor v = 0.02\nfactor y = 0\n\
                      dv = k * (m - v) dt + s * sqrt(v) dW\n\
                      dy = c * log(v) * k dt + c dZ\n";
        let (_, diagnostics) = run(source);
        let domain = of_rule(&diagnostics, &rules::FACTOR_DOMAIN);
        assert_eq!(domain.len(), 1, "{diagnostics:#?}");
        assert!(
            domain[0].message.contains("fails the Feller condition"),
            "{}",
            domain[0].message
        );
        assert_eq!(of_rule(&diagnostics, &rules::FELLER_CONDITION).len(), 1);
    }

    #[test]
    fn impossible_starts_are_reported() {
        let gbm = "model quarry\nparam mu = 0.05 [1/year]\nparam s = 0.2 [1/sqrt(year)]\n\
                   shock W\nfactor p = 0\ndp = mu * p dt + s * p dW\n";
        let (_, diagnostics) = run(gbm);
        let domain = of_rule(&diagnostics, &rules::FACTOR_DOMAIN);
        assert_eq!(domain.len(), 1, "{diagnostics:#?}");
        assert!(
            domain[0].message.contains("stays at zero"),
            "{}",
            domain[0].message
        );

        let square_root = "model quarry\nparam k = 1 [1/year]\nparam m = 0.05\n\
                           param s = 0.1 [1/sqrt(year)]\nshock W\nfactor h = -0.01\n\
                           dh = k * (m - h) dt + s * sqrt(h) dW\n";
        let (_, diagnostics) = run(square_root);
        let domain = of_rule(&diagnostics, &rules::FACTOR_DOMAIN);
        assert_eq!(domain.len(), 1, "{diagnostics:#?}");
        assert!(
            domain[0].message.contains("starts at -0.01"),
            "{}",
            domain[0].message
        );
    }

    #[test]
    fn explosive_drift_states_coefficient_and_doubling_time() {
        // b = +0.8 per year: deviations double every ln 2/0.8 = 0.866 years.
        let (_, diagnostics) = run(
            "model osric\nparam kappa = 0.8 [1/year]\nparam level = 3%\n\
             param vol = 1% [1/sqrt(year)]\nshock W\nfactor s = 3%\n\
             ds = kappa * (s - level) dt + vol dW\n",
        );
        let found = of_rule(&diagnostics, &rules::NOT_MEAN_REVERTING);
        assert_eq!(found.len(), 1, "{diagnostics:#?}");
        assert!(
            found[0].message.contains("is kappa = +0.8 per year"),
            "{}",
            found[0].message
        );
        assert!(
            found[0].message.contains("every 0.866 years"),
            "{}",
            found[0].message
        );
    }

    #[test]
    fn growth_of_a_geometric_brownian_is_not_explosive() {
        let (_, diagnostics) = run(
            "model ledger\nparam mu = 0.3 [1/year]\nparam s = 0.2 [1/sqrt(year)]\n\
             shock W\nfactor p = 10\ndp = mu * p dt + s * p dW\n",
        );
        assert!(of_rule(&diagnostics, &rules::NOT_MEAN_REVERTING).is_empty());
    }

    #[test]
    fn coupled_drift_with_an_unstable_eigenvalue_is_reported_once() {
        // A = [[-0.1, 1], [1, -0.1]] has eigenvalues 0.9 and −1.1 (common practice, no
        // source: eigenvalues of a symmetric 2×2 matrix are a ± b).
        let (_, diagnostics) = run(
            "model tandem\nparam k = 0.1 [1/year]\nparam c = 1 [1/year]\n\
             param v = 0.01 [1/sqrt(year)]\nshock W, Z\nfactor x = 0\nfactor y = 0\n\
             dx = (-k * x + c * y) dt + v dW\ndy = (c * x - k * y) dt + v dZ\n",
        );
        let found = of_rule(&diagnostics, &rules::NOT_MEAN_REVERTING);
        assert_eq!(found.len(), 1, "{diagnostics:#?}");
        assert!(
            found[0].message.contains("eigenvalue 0.9 per year"),
            "{}",
            found[0].message
        );
        assert_eq!(found[0].related.len(), 1);
    }

    #[test]
    fn an_explosive_block_in_a_model_too_large_for_the_system_engines() {
        // 30 decoupled states, then x and y with A = [[-0.1, 1], [1, -0.1]]: eigenvalue 0.9.
        let mut source = String::from(
            "model wide_tandem\nparam k = 0.1 [1/year]\nparam c = 1 [1/year]\n\
             param v = 0.01 [1/sqrt(year)]\nshock W, Z\n",
        );
        for i in 0..30 {
            source.push_str(&format!("factor q{i} = 0\ndq{i} = -k * q{i} dt + v dW\n"));
        }
        source.push_str(
            "factor x = 0\nfactor y = 0\ndx = (-k * x + c * y) dt + v dW\n\
             dy = (c * x - k * y) dt + v dZ\n",
        );
        let (_, diagnostics) = run(&source);
        let found = of_rule(&diagnostics, &rules::NOT_MEAN_REVERTING);
        assert_eq!(found.len(), 1, "{diagnostics:#?}");
        assert!(
            found[0].message.contains("coupled drift of x, y"),
            "{}",
            found[0].message
        );
    }

    #[test]
    fn inconsistent_correlations_give_the_smallest_eigenvalue() {
        // [[1, .9, .9], [.9, 1, −.9], [.9, −.9, 1]]: eigenvalues 1.9, 1.9, −0.8 (numpy.linalg.eigvalsh).
        let (model, diagnostics) =
            run("model trio\nparam v = 0.01 [1/sqrt(year)]\nshock A, B, C\n\
             corr A B = 0.9\ncorr A C = 0.9\ncorr B C = -0.9\n\
             factor x = 0\nfactor y = 0\nfactor z = 0\n\
             dx = v dA\ndy = v dB\ndz = v dC\n");
        let found = of_rule(&diagnostics, &rules::CORRELATION_NOT_PSD);
        assert_eq!(found.len(), 1, "{diagnostics:#?}");
        assert!(
            found[0].message.contains("eigenvalue -0.8 < 0"),
            "{}",
            found[0].message
        );
        assert_eq!(found[0].span, model.correlations[0].span);
        assert_eq!(found[0].related.len(), 2);
    }

    #[test]
    fn expectations_report_value_interval_and_missing_figures() {
        // OU mean at 1 year: 0.03 + (0.025 − 0.03)e^{−1.2} = 0.0284940 (Vasicek 1977).
        let source = "model pinned\nparam kappa = 1.2 [1/year] > 0\nparam level = 3%\n\
                      param vol = 0.8% [1/sqrt(year)] > 0\nshock W\nfactor r = 2.5%\n\
                      dr = kappa * (level - r) dt + vol dW\n\
                      expect mean(r, 1 year) in [2.9%, 3.3%]\n\
                      expect halflife(r) < 1 year\n";
        let (_, diagnostics) = run(source);
        let found = of_rule(&diagnostics, &rules::EXPECTATION_FAILED);
        assert_eq!(found.len(), 1, "{diagnostics:#?}");
        assert!(
            found[0]
                .message
                .starts_with("mean(r, 1 year) = 0.028494 is outside the expected [0.029, 0.033]"),
            "{}",
            found[0].message
        );
        let missing = "model drifting\nparam mu = 0.01 [1/year]\nparam v = 0.1 [1/sqrt(year)]\n\
                       shock W\nfactor x = 0\ndx = mu dt + v dW\n\
                       expect stationary_mean(x) > 0\n";
        let (_, diagnostics) = run(missing);
        let found = of_rule(&diagnostics, &rules::EXPECTATION_FAILED);
        assert_eq!(found.len(), 1, "{diagnostics:#?}");
        assert!(
            found[0].message.contains("does not exist"),
            "{}",
            found[0].message
        );
        assert!(
            found[0].message.contains("arithmetic-brownian"),
            "{}",
            found[0].message
        );
    }

    #[test]
    fn numbers_print_with_significant_digits() {
        assert_eq!(number(0.0576, 3), "0.0576");
        assert_eq!(number(0.09, 3), "0.09");
        assert_eq!(number(1386.29, 3), "1386");
        assert_eq!(round_significant(0.78125, 3, true), 0.782);
        assert_eq!(round_significant(0.2449, 2, false), 0.24);
    }

    #[test]
    fn bound_containment() {
        let nonnegative = Interval {
            lower: Some((0.0, true)),
            upper: None,
        };
        assert!(!interval_keeps(&nonnegative, None));
        assert!(interval_keeps(&nonnegative, Some((0.0, true))));
        let positive = Interval {
            lower: Some((0.0, false)),
            upper: None,
        };
        assert!(!interval_keeps(&positive, Some((0.0, true))));
        assert!(interval_keeps(&positive, Some((0.0, false))));
    }
}
