//! Evaluation of a written unit expression into a dimension and a scale factor to the
//! model's clock, with errors that say what to write instead.

use crate::dimension::{Dimension, TIME_BASE};
use crate::rational::Rational;
use crate::time_units::{exact_years_of, is_time_unit, time_unit_years_exact, TIME_UNITS};
use sdeck_diagnostics::{Diagnostic, Rule, Span};
use sdeck_syntax::ast::UnitExpr;
use std::fmt;

/// A unit expression evaluated: its dimension and the factor that converts a value
/// written in it into clock units (`value_in_clock = written * scale`).
#[derive(Clone, Debug, PartialEq)]
pub struct UnitValue {
    pub dimension: Dimension,
    pub scale: f64,
}

/// Why a unit expression could not be evaluated, where, and what to write instead.
#[derive(Clone, Debug, PartialEq)]
pub struct UnitError {
    pub span: Span,
    pub message: String,
    pub help: Option<String>,
    /// The unit is a name that is neither declared nor a time unit (an unknown name,
    /// rather than a wrong dimension): what the caller's choice of rule reads.
    pub undeclared: bool,
}

impl UnitError {
    fn new(span: Span, message: impl Into<String>, help: Option<String>) -> UnitError {
        UnitError {
            span,
            message: message.into(),
            help,
            undeclared: false,
        }
    }

    /// The error as a diagnostic of `rule` (the caller decides which rule applies).
    pub fn to_diagnostic(&self, rule: &'static Rule) -> Diagnostic {
        let diagnostic = Diagnostic::new(rule, self.span.clone(), self.message.clone());
        match &self.help {
            Some(help) => diagnostic.with_help(help.clone()),
            None => diagnostic,
        }
    }
}

impl fmt::Display for UnitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for UnitError {}

/// Evaluates a unit expression.
///
/// `declared` tells which user base units exist (`unit EUR`); `clock_years` is the length
/// of the model's clock unit in years (see [`crate::time_unit_years`]).
///
/// Scale rule: a value `v` written in unit `U` is `v * scale` in clock units, where each
/// time unit `u^e` contributes `(years(u) / clock_years)^e`. So `[1/day]` with a year
/// clock has scale 365, `[1/sqrt(day)]` `sqrt(365)`, `[day]` 1/365, `[month]` 1/12,
/// `[1/bday]` 252, `[EUR/year]` 1.
pub fn eval_unit(
    expr: &UnitExpr,
    declared: &dyn Fn(&str) -> bool,
    clock_years: f64,
) -> Result<UnitValue, UnitError> {
    eval_unit_with_names(expr, declared, &[], clock_years)
}

/// [`eval_unit`], with the names of the declared units so that a misspelt unit can be
/// matched against them too (`EUT` → did you mean `EUR`?).
pub fn eval_unit_with_names(
    expr: &UnitExpr,
    declared: &dyn Fn(&str) -> bool,
    declared_names: &[&str],
    clock_years: f64,
) -> Result<UnitValue, UnitError> {
    if !(clock_years.is_finite() && clock_years > 0.0) {
        return Err(UnitError::new(
            expr.span(),
            format!("the clock's length must be a positive number of years, not {clock_years}"),
            Some(format!(
                "use a time unit as the clock ({})",
                TIME_UNITS.join(", ")
            )),
        ));
    }
    let evaluator = Evaluator {
        declared,
        declared_names,
    };
    let partial = evaluator.eval(expr)?;
    let overflow = || {
        UnitError::new(
            expr.span(),
            "the exponent of time in this unit is too large to compute exactly",
            Some(SIMPLIFY_HELP.to_string()),
        )
    };
    let mut time_exponent = Rational::ZERO;
    for exponent in partial.time_units {
        time_exponent = time_exponent.checked_add(exponent).ok_or_else(overflow)?;
    }
    let time = Dimension::time().pow(time_exponent).ok_or_else(overflow)?;
    let dimension = partial.named.checked_mul(&time).ok_or_else(overflow)?;
    let scale = scale_to_clock(&partial.time_units, clock_years);
    if !(scale.is_finite() && scale > 0.0) {
        return Err(UnitError::new(
            expr.span(),
            format!(
                "converting [{}] to the clock's unit gives a factor too large or too small \
                 for a floating-point number",
                unit_expr_text(expr)
            ),
            Some(SIMPLIFY_HELP.to_string()),
        ));
    }
    Ok(UnitValue { dimension, scale })
}

/// Suggests how to write a dimension in the clock's unit, for messages like "did you
/// mean [1/sqrt(year)]?": the bracket text without brackets, e.g. `1/sqrt(year)`.
pub fn suggest_unit_text(dim: &Dimension, clock_unit: &str) -> String {
    dim.display_in(clock_unit)
}

/// A unit expression printed back as text (without brackets), parenthesised so that it
/// parses to the same tree: `1/sqrt(day)`, `EUR*(1/year)`, `(EUR*year)^(-1/2)`.
pub fn unit_expr_text(expr: &UnitExpr) -> String {
    match expr {
        UnitExpr::One { .. } => "1".to_string(),
        UnitExpr::Name(ident) => ident.name.clone(),
        UnitExpr::Mul { lhs, rhs, .. } => {
            format!("{}*{}", unit_expr_text(lhs), operand_text(rhs))
        }
        UnitExpr::Div { lhs, rhs, .. } => {
            format!("{}/{}", unit_expr_text(lhs), operand_text(rhs))
        }
        UnitExpr::Pow { base, exponent, .. } => {
            let base_text = match base.as_ref() {
                UnitExpr::One { .. } | UnitExpr::Name(_) | UnitExpr::Sqrt { .. } => {
                    unit_expr_text(base)
                }
                _ => format!("({})", unit_expr_text(base)),
            };
            if exponent.den == 1 && exponent.num >= 0 {
                format!("{base_text}^{}", exponent.num)
            } else if exponent.den == 1 {
                format!("{base_text}^({})", exponent.num)
            } else {
                format!("{base_text}^({}/{})", exponent.num, exponent.den)
            }
        }
        UnitExpr::Sqrt { inner, .. } => format!("sqrt({})", unit_expr_text(inner)),
    }
}

/// The right operand of `*` or `/`: compound products and quotients need parentheses.
fn operand_text(expr: &UnitExpr) -> String {
    match expr {
        UnitExpr::Mul { .. } | UnitExpr::Div { .. } => format!("({})", unit_expr_text(expr)),
        _ => unit_expr_text(expr),
    }
}

const SIMPLIFY_HELP: &str = "units take small exponents such as 2, -1 or 1/2; simplify the unit";

/// A unit under evaluation: user bases as a dimension, and the exponent of each built-in
/// time unit kept apart (in the order of [`TIME_UNITS`]) so that the scale can be computed
/// from exact ratios at the end.
struct Partial {
    named: Dimension,
    time_units: [Rational; TIME_UNITS.len()],
}

impl Partial {
    fn dimensionless() -> Partial {
        Partial {
            named: Dimension::dimensionless(),
            time_units: [Rational::ZERO; TIME_UNITS.len()],
        }
    }

    /// Combines two partial units exponent by exponent; `None` on overflow.
    fn combine(
        &self,
        other: &Partial,
        combine_named: fn(&Dimension, &Dimension) -> Option<Dimension>,
        combine_exponents: fn(Rational, Rational) -> Option<Rational>,
    ) -> Option<Partial> {
        let mut time_units = self.time_units;
        for (own, theirs) in time_units.iter_mut().zip(other.time_units) {
            *own = combine_exponents(*own, theirs)?;
        }
        Some(Partial {
            named: combine_named(&self.named, &other.named)?,
            time_units,
        })
    }

    fn pow(&self, exponent: Rational) -> Option<Partial> {
        let mut time_units = self.time_units;
        for own in time_units.iter_mut() {
            *own = own.checked_mul(exponent)?;
        }
        Some(Partial {
            named: self.named.pow(exponent)?,
            time_units,
        })
    }
}

struct Evaluator<'a> {
    declared: &'a dyn Fn(&str) -> bool,
    declared_names: &'a [&'a str],
}

impl Evaluator<'_> {
    fn eval(&self, expr: &UnitExpr) -> Result<Partial, UnitError> {
        let overflow = || {
            UnitError::new(
                expr.span(),
                format!(
                    "an exponent in [{}] is too large to compute exactly",
                    unit_expr_text(expr)
                ),
                Some(SIMPLIFY_HELP.to_string()),
            )
        };
        match expr {
            UnitExpr::One { .. } => Ok(Partial::dimensionless()),
            UnitExpr::Name(ident) => self.eval_name(&ident.name, ident.span.clone()),
            UnitExpr::Mul { lhs, rhs, .. } => {
                let (lhs, rhs) = (self.eval(lhs)?, self.eval(rhs)?);
                lhs.combine(&rhs, Dimension::checked_mul, Rational::checked_add)
                    .ok_or_else(overflow)
            }
            UnitExpr::Div { lhs, rhs, .. } => {
                let (lhs, rhs) = (self.eval(lhs)?, self.eval(rhs)?);
                lhs.combine(&rhs, Dimension::checked_div, Rational::checked_sub)
                    .ok_or_else(overflow)
            }
            UnitExpr::Pow { base, exponent, .. } => {
                let Some(power) = Rational::new(exponent.num, exponent.den) else {
                    let message = if exponent.den == 0 {
                        format!("the exponent {}/0 has a zero denominator", exponent.num)
                    } else {
                        format!(
                            "the exponent {}/{} is too large to compute exactly",
                            exponent.num, exponent.den
                        )
                    };
                    return Err(UnitError::new(
                        expr.span(),
                        message,
                        Some("write a small exponent such as `^2`, `^(-1)` or `^(1/2)`".into()),
                    ));
                };
                self.eval(base)?.pow(power).ok_or_else(overflow)
            }
            UnitExpr::Sqrt { inner, .. } => {
                self.eval(inner)?.pow(Rational::HALF).ok_or_else(overflow)
            }
        }
    }

    fn eval_name(&self, name: &str, span: Span) -> Result<Partial, UnitError> {
        if let Some(index) = TIME_UNITS.iter().position(|unit| *unit == name) {
            let mut partial = Partial::dimensionless();
            if let Some(slot) = partial.time_units.get_mut(index) {
                *slot = Rational::ONE;
            }
            return Ok(partial);
        }
        if name == TIME_BASE {
            // `time` names the dimension every time unit shares; a user unit of that name
            // would be silently mixed up with it.
            return Err(UnitError::new(
                span,
                "`time` cannot be used as a unit: it is the dimension that every time unit shares",
                Some(format!(
                    "write a time unit ({}), or declare your unit under another name",
                    TIME_UNITS.join(", ")
                )),
            ));
        }
        if (self.declared)(name) {
            return Ok(Partial {
                named: Dimension::base(name),
                time_units: [Rational::ZERO; TIME_UNITS.len()],
            });
        }
        let help = self
            .suggest_name(name)
            .map(|candidate| format!("did you mean `{candidate}`?"));
        Err(UnitError {
            undeclared: true,
            ..UnitError::new(
                span,
                format!(
                    "unit `{name}` is not declared; declare it with `unit {name}` or use a time \
                 unit ({})",
                    TIME_UNITS.join(", ")
                ),
                help,
            )
        })
    }

    /// A known unit close to `name`: a usual abbreviation of a time unit, the same name in
    /// another case, or the nearest name within a small edit distance.
    fn suggest_name(&self, name: &str) -> Option<String> {
        if let Some((_, unit)) = TIME_ABBREVIATIONS
            .iter()
            .find(|(abbreviation, _)| *abbreviation == name)
        {
            return Some((*unit).to_string());
        }
        for variant in [name.to_lowercase(), name.to_uppercase()] {
            if variant != name && (is_time_unit(&variant) || (self.declared)(&variant)) {
                return Some(variant);
            }
        }
        let candidates = TIME_UNITS
            .iter()
            .chain(self.declared_names.iter())
            .copied()
            .filter(|candidate| *candidate != TIME_BASE);
        let limit = |length: usize, _| if length <= 4 { 1 } else { 2 };
        sdeck_diagnostics::closest_within(name, candidates, sdeck_diagnostics::Case::Kept, limit)
            .map(str::to_string)
    }
}

/// Short forms people type for time units, mapped to the built-in name (common practice,
/// no source).
const TIME_ABBREVIATIONS: [(&str, &str); 17] = [
    ("y", "year"),
    ("q", "quarter"),
    ("qtr", "quarter"),
    ("h", "hour"),
    ("hr", "hour"),
    ("hrs", "hour"),
    ("yr", "year"),
    ("yrs", "year"),
    ("mo", "month"),
    ("mth", "month"),
    ("mths", "month"),
    ("w", "week"),
    ("wk", "week"),
    ("wks", "week"),
    ("d", "day"),
    ("bd", "bday"),
    ("business_day", "bday"),
];

/// The product over time units `u` of `(years(u) / clock_years)^e_u`.
///
/// When the clock is a built-in unit the ratio `years(u) / clock_years` is an exact
/// fraction `p/q` of small integers, and `(p/q)^e` is computed as `p^e / q^e` with `sqrt`
/// for half-integer exponents, so that e.g. `[1/sqrt(day)]` in a year clock is exactly
/// `365f64.sqrt()`. Numerator and denominator are gathered separately and divided once.
fn scale_to_clock(time_units: &[Rational; TIME_UNITS.len()], clock_years: f64) -> f64 {
    let clock_exact = exact_years_of(clock_years);
    let mut numerator = 1.0_f64;
    let mut denominator = 1.0_f64;
    for (name, exponent) in TIME_UNITS.iter().zip(time_units) {
        if exponent.is_zero() {
            continue;
        }
        let Some(years) = time_unit_years_exact(name) else {
            continue;
        };
        let (up, down) = match clock_exact.and_then(|clock| years.checked_div(clock)) {
            Some(ratio) => (ratio.num() as f64, ratio.den() as f64),
            None => (years.to_f64() / clock_years, 1.0),
        };
        let Some(magnitude) = exponent.checked_abs() else {
            // Only i64::MIN has no absolute value: the factor is out of range anyway.
            return if (up > down) == exponent.is_positive() {
                f64::INFINITY
            } else {
                0.0
            };
        };
        let (up, down) = if exponent.is_positive() {
            (up, down)
        } else {
            (down, up)
        };
        numerator *= positive_power(up, magnitude);
        denominator *= positive_power(down, magnitude);
    }
    numerator / denominator
}

/// `base^exponent` for a positive exponent: `powi` for integers, `powi` times `sqrt` for
/// half-integers (exact where the power is exact), `powf` otherwise.
fn positive_power(base: f64, exponent: Rational) -> f64 {
    let whole = |power: i64| match i32::try_from(power) {
        Ok(power) => base.powi(power),
        Err(_) => base.powf(power as f64),
    };
    match exponent.den() {
        1 => whole(exponent.num()),
        2 => whole(exponent.num() / 2) * base.sqrt(),
        _ => base.powf(exponent.to_f64()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edit_distances() {
        // The distance the suggestions use (strsim's optimal string alignment), worked
        // by hand.
        let cases = [
            ("year", "year", 0),
            ("yaer", "year", 1),
            ("years", "year", 1),
            ("days", "day", 1),
            ("mnoth", "month", 1),
            ("", "day", 3),
            ("bday", "day", 1),
            ("EUR", "eur", 3),
            ("κ", "k", 1),
        ];
        for (left, right, distance) in cases {
            let edit_distance = sdeck_diagnostics::edit_distance;
            assert_eq!(edit_distance(left, right), distance, "{left} / {right}");
            assert_eq!(edit_distance(right, left), distance, "{right} / {left}");
        }
    }

    #[test]
    fn half_integer_powers_use_sqrt() {
        let three_halves = Rational::new(3, 2).unwrap_or_default();
        assert_eq!(positive_power(4.0, three_halves), 8.0);
        assert_eq!(positive_power(365.0, Rational::HALF), 365f64.sqrt());
        assert_eq!(positive_power(2.0, Rational::from_int(10)), 1024.0);
        let third = Rational::new(1, 3).unwrap_or_default();
        assert!((positive_power(27.0, third) - 3.0).abs() < 1e-15);
    }

    #[test]
    fn abbreviations_name_time_units() {
        for (abbreviation, unit) in TIME_ABBREVIATIONS {
            assert!(is_time_unit(unit), "{abbreviation} -> {unit}");
        }
    }
}
