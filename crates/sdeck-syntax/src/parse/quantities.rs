//! Numbers, quantities, units, exponents and bounds.

use super::{is_keyword_token, syntax_error, Builder, Result, Rule};
use crate::ast::*;
use pest::iterators::Pair;
use sdeck_diagnostics::Span;

/// Which end of a bound a value is.
#[derive(Clone, Copy, PartialEq, Eq)]
pub(super) enum Side {
    Lower,
    Upper,
}

impl Builder {
    pub(super) fn number_value(&self, text: &str, span: &Span) -> Result<f64> {
        crate::numbers::scaled_number(text)
            .map_err(|error| syntax_error(span.clone(), error.describe(text)))
    }

    pub(super) fn signed_number(&mut self, pair: Pair<Rule>) -> Result<Number> {
        let span = self.span(&pair);
        let text: String = pair.as_str().split_whitespace().collect();
        let mut negative = false;
        let mut value = 0.0;
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::minus => negative = true,
                Rule::number => value = self.number_value(p.as_str(), &span)?,
                _ => {}
            }
        }
        Ok(Number {
            value: if negative { -value } else { value },
            text,
            span,
        })
    }

    pub(super) fn plain_number(&mut self, pair: Pair<Rule>) -> Result<Number> {
        let span = self.span(&pair);
        let value = self.number_value(pair.as_str(), &span)?;
        Ok(Number {
            value,
            text: pair.as_str().to_string(),
            span,
        })
    }

    pub(super) fn quantity(&mut self, pair: Pair<Rule>) -> Result<Quantity> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let number_pair = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a number is expected"))?;
        let number = self.signed_number(number_pair)?;
        let unit = match inner.next() {
            Some(p) if p.as_rule() == Rule::bracket_unit => Some(self.bracket_unit(p)?),
            Some(p) => {
                let name_pair = p
                    .into_inner()
                    .next()
                    .ok_or_else(|| syntax_error(span.clone(), "a unit name is expected"))?;
                Some(UnitExpr::Name(self.ident(&name_pair)))
            }
            None => None,
        };
        Ok(Quantity { number, unit, span })
    }

    pub(super) fn bracket_unit(&mut self, pair: Pair<Rule>) -> Result<UnitExpr> {
        let span = self.span(&pair);
        let inner = pair
            .into_inner()
            .next()
            .ok_or_else(|| syntax_error(span, "a unit is expected"))?;
        self.unit_expr(inner)
    }

    pub(super) fn unit_expr(&mut self, pair: Pair<Rule>) -> Result<UnitExpr> {
        let mut inner = pair.into_inner();
        let first = inner.next();
        let mut acc = match first {
            Some(p) => self.unit_term(p)?,
            None => return Err(syntax_error(self.offset..self.offset, "a unit is expected")),
        };
        while let (Some(op), Some(rhs)) = (inner.next(), inner.next()) {
            let rhs = self.unit_term(rhs)?;
            let span = acc.span().start..rhs.span().end;
            self.count(&span)?;
            acc = if op.as_str() == "*" {
                UnitExpr::Mul {
                    lhs: Box::new(acc),
                    rhs: Box::new(rhs),
                    span,
                }
            } else {
                UnitExpr::Div {
                    lhs: Box::new(acc),
                    rhs: Box::new(rhs),
                    span,
                }
            };
        }
        Ok(acc)
    }

    pub(super) fn unit_term(&mut self, pair: Pair<Rule>) -> Result<UnitExpr> {
        let span = self.span(&pair);
        self.count(&span)?;
        let mut inner = pair.into_inner();
        let atom = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a unit is expected"))?;
        let base = match atom.as_rule() {
            Rule::unit_one => UnitExpr::One {
                span: self.span(&atom),
            },
            Rule::unit_name => UnitExpr::Name(self.ident(&atom)),
            Rule::unit_sqrt => {
                let sqrt_span = self.span(&atom);
                let inner_pair = atom
                    .into_inner()
                    .next()
                    .ok_or_else(|| syntax_error(sqrt_span.clone(), "a unit is expected"))?;
                UnitExpr::Sqrt {
                    inner: Box::new(self.unit_expr(inner_pair)?),
                    span: sqrt_span,
                }
            }
            Rule::unit_paren => {
                let paren_span = self.span(&atom);
                let inner_pair = atom
                    .into_inner()
                    .next()
                    .ok_or_else(|| syntax_error(paren_span, "a unit is expected"))?;
                self.unit_expr(inner_pair)?
            }
            _ => return Err(syntax_error(span, "a unit is expected")),
        };
        match inner.next() {
            None => Ok(base),
            Some(exponent_pair) => {
                let exponent = self.exponent(exponent_pair)?;
                Ok(UnitExpr::Pow {
                    base: Box::new(base),
                    exponent,
                    span,
                })
            }
        }
    }

    pub(super) fn exponent(&mut self, pair: Pair<Rule>) -> Result<Exponent> {
        let span = self.span(&pair);
        let mut num: Option<i64> = None;
        let mut den: i64 = 1;
        for p in pair.into_inner() {
            let parsed: i64 = p.as_str().parse().map_err(|_| {
                syntax_error(
                    span.clone(),
                    format!("exponent `{}` is out of range", p.as_str()),
                )
            })?;
            match p.as_rule() {
                Rule::integer => num = Some(parsed),
                _ => den = parsed,
            }
        }
        let num = num.ok_or_else(|| syntax_error(span.clone(), "an exponent is expected"))?;
        if den == 0 {
            return Err(syntax_error(span, "the exponent's denominator is zero"));
        }
        let g = gcd(num.unsigned_abs(), den.unsigned_abs()).max(1) as i64;
        Ok(Exponent {
            num: num / g,
            den: den / g,
        })
    }

    pub(super) fn bound(&mut self, pair: Pair<Rule>) -> Result<Bound> {
        let span = self.span(&pair);
        let parts: Vec<Pair<Rule>> = pair
            .into_inner()
            .filter(|p| !is_keyword_token(p.as_rule()))
            .collect();
        let mut lower = None;
        let mut upper = None;
        match parts.as_slice() {
            [op, value] if op.as_rule() == Rule::compare_op => {
                let side = if op.as_str().starts_with('>') {
                    Side::Lower
                } else {
                    Side::Upper
                };
                let end = self.bound_value(value.clone(), side)?;
                match op.as_str() {
                    ">" => {
                        lower = end.map(|value| BoundEnd {
                            value,
                            inclusive: false,
                        })
                    }
                    ">=" => {
                        lower = end.map(|value| BoundEnd {
                            value,
                            inclusive: true,
                        })
                    }
                    "<" => {
                        upper = end.map(|value| BoundEnd {
                            value,
                            inclusive: false,
                        })
                    }
                    _ => {
                        upper = end.map(|value| BoundEnd {
                            value,
                            inclusive: true,
                        })
                    }
                }
            }
            [open, a, b, close] => {
                lower = self
                    .bound_value(a.clone(), Side::Lower)?
                    .map(|value| BoundEnd {
                        value,
                        inclusive: open.as_str() == "[",
                    });
                upper = self
                    .bound_value(b.clone(), Side::Upper)?
                    .map(|value| BoundEnd {
                        value,
                        inclusive: close.as_str() == "]",
                    });
            }
            _ => {
                return Err(syntax_error(
                    span,
                    "a bound such as `> 0` or `in [0, 1]` is expected",
                ))
            }
        }
        Ok(Bound { lower, upper, span })
    }

    /// A bound end; `None` for an infinite end on its own side (`-inf` below, `inf`
    /// above), which bounds nothing. An infinite end on the wrong side (`>= inf`,
    /// `< -inf`) is kept as an infinite number: it admits no value, which the analysis
    /// reports and the formatter prints as written.
    pub(super) fn bound_value(&mut self, pair: Pair<Rule>, side: Side) -> Result<Option<Number>> {
        let span = self.span(&pair);
        let inner = pair
            .into_inner()
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a number or `inf` is expected"))?;
        match inner.as_rule() {
            Rule::infinity => {
                let text: String = inner.as_str().split_whitespace().collect();
                let negative = text.starts_with('-');
                if negative == (side == Side::Lower) {
                    return Ok(None);
                }
                Ok(Some(Number {
                    value: if negative {
                        f64::NEG_INFINITY
                    } else {
                        f64::INFINITY
                    },
                    text,
                    span,
                }))
            }
            _ => self.signed_number(inner).map(Some),
        }
    }
}

pub(super) fn gcd(mut a: u64, mut b: u64) -> u64 {
    while b != 0 {
        let r = a % b;
        a = b;
        b = r;
    }
    a
}
