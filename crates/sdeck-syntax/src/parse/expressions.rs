//! Expressions: sums, products, negations, powers, calls and atoms.

use super::{syntax_error, Builder, Result, Rule};
use crate::ast::*;
use pest::iterators::Pair;
use sdeck_diagnostics::Span;

impl Builder {
    pub(super) fn expr(&mut self, pair: Pair<Rule>) -> Result<Expr> {
        let span = self.span(&pair);
        self.count(&span)?;
        match pair.as_rule() {
            Rule::expr => self.sum(pair, span),
            Rule::product => {
                let factors = self.factors(pair)?;
                fold_product(factors).ok_or_else(|| syntax_error(span, "an expression is expected"))
            }
            Rule::unary => self.negation(pair, span),
            Rule::power => self.power(pair, span),
            Rule::number => Ok(Expr::Number(self.plain_number(pair)?)),
            Rule::quantity_atom => self.quantity_atom(pair, span),
            Rule::name | Rule::name_or_function => Ok(Expr::Name(self.ident(&pair))),
            Rule::call => self.call(pair, span),
            Rule::paren => {
                let inner_pair = pair
                    .into_inner()
                    .next()
                    .ok_or_else(|| syntax_error(span.clone(), "an expression is expected"))?;
                Ok(Expr::Paren {
                    inner: Box::new(self.expr(inner_pair)?),
                    span,
                })
            }
            _ => Err(syntax_error(span, "an expression is expected")),
        }
    }

    /// `a + b - c`, folded to the left.
    fn sum(&mut self, pair: Pair<Rule>, span: Span) -> Result<Expr> {
        let mut inner = pair.into_inner();
        let first = inner
            .next()
            .ok_or_else(|| syntax_error(span, "an expression is expected"))?;
        let mut acc = self.expr(first)?;
        while let (Some(op), Some(rhs)) = (inner.next(), inner.next()) {
            let rhs = self.expr(rhs)?;
            let op = if op.as_str() == "+" {
                BinaryOp::Add
            } else {
                BinaryOp::Sub
            };
            acc = binary(op, acc, rhs);
        }
        Ok(acc)
    }

    /// One or more `-` before an operand, each its own node.
    fn negation(&mut self, pair: Pair<Rule>, span: Span) -> Result<Expr> {
        let mut minus_spans = Vec::new();
        let mut operand = None;
        for p in pair.into_inner() {
            if p.as_rule() == Rule::minus {
                let minus = self.span(&p);
                // Every minus is a node: `----…1` must not nest without limit.
                self.count(&minus)?;
                minus_spans.push(minus);
            } else {
                operand = Some(self.expr(p)?);
            }
        }
        let mut acc = operand.ok_or_else(|| syntax_error(span, "an expression is expected"))?;
        for m in minus_spans.into_iter().rev() {
            let s = m.start..acc.span().end;
            acc = Expr::Neg {
                operand: Box::new(acc),
                span: s,
            };
        }
        Ok(acc)
    }

    /// `base ^ exponent`, or the base alone.
    fn power(&mut self, pair: Pair<Rule>, span: Span) -> Result<Expr> {
        let mut inner = pair.into_inner();
        let base_pair = inner
            .next()
            .ok_or_else(|| syntax_error(span, "an expression is expected"))?;
        let base = self.expr(base_pair)?;
        match inner.next() {
            Some(exp) => {
                let exp = self.expr(exp)?;
                Ok(binary(BinaryOp::Pow, base, exp))
            }
            None => Ok(base),
        }
    }

    /// A number with a unit in brackets inside an expression: `2 [1/year]`.
    fn quantity_atom(&mut self, pair: Pair<Rule>, span: Span) -> Result<Expr> {
        let mut inner = pair.into_inner();
        let (Some(number_pair), Some(unit_pair)) = (inner.next(), inner.next()) else {
            return Err(syntax_error(span, "a number with a unit is expected"));
        };
        let number = self.plain_number(number_pair)?;
        let unit = Some(self.bracket_unit(unit_pair)?);
        Ok(Expr::Quantity(Quantity { number, unit, span }))
    }

    /// `function(arg, ...)`.
    fn call(&mut self, pair: Pair<Rule>, span: Span) -> Result<Expr> {
        let mut inner = pair.into_inner();
        let function_pair = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a function name is expected"))?;
        let function = self.ident(&function_pair);
        let mut args = Vec::new();
        for p in inner {
            args.push(self.expr(p)?);
        }
        Ok(Expr::Call {
            function,
            args,
            span,
        })
    }

    /// The factors of a product with the operator before each (the first has `*`).
    pub(super) fn factors(&mut self, pair: Pair<Rule>) -> Result<Vec<(BinaryOp, Expr)>> {
        let mut factors = Vec::new();
        let mut op = BinaryOp::Mul;
        for p in pair.into_inner() {
            if p.as_rule() == Rule::mul_op {
                op = if p.as_str() == "*" {
                    BinaryOp::Mul
                } else {
                    BinaryOp::Div
                };
            } else {
                factors.push((op, self.expr(p)?));
            }
        }
        Ok(factors)
    }
}

pub(super) fn binary(op: BinaryOp, lhs: Expr, rhs: Expr) -> Expr {
    let span = lhs.span().start..rhs.span().end;
    Expr::Binary {
        op,
        lhs: Box::new(lhs),
        rhs: Box::new(rhs),
        span,
    }
}

pub(super) fn fold_product(factors: Vec<(BinaryOp, Expr)>) -> Option<Expr> {
    let mut iter = factors.into_iter();
    let (_, first) = iter.next()?;
    Some(iter.fold(first, |acc, (op, rhs)| binary(op, acc, rhs)))
}
