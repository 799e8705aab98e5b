//! Statements: the dispatch on the statement's rule, declarations and equations.

use super::expressions::fold_product;
use super::{is_keyword_token, syntax_error, Builder, Result, Rule};
use crate::ast::*;
use crate::split::is_ident_start;
use pest::iterators::Pair;
use sdeck_diagnostics::{Diagnostic, Span};

impl Builder {
    pub(super) fn statement(&mut self, pair: Pair<Rule>) -> Result<StatementKind> {
        let rule = pair.as_rule();
        let span = self.span(&pair);
        let mut inner = pair.into_inner().filter(|p| !is_keyword_token(p.as_rule()));
        let mut next = || {
            inner
                .next()
                .ok_or_else(|| syntax_error(span.clone(), "incomplete statement"))
        };
        Ok(match rule {
            Rule::model_stmt => StatementKind::Model {
                name: self.ident(&next()?),
            },
            Rule::clock_stmt => StatementKind::Clock {
                unit: self.ident(&next()?),
            },
            Rule::horizon_stmt => StatementKind::Horizon {
                value: Box::new(self.quantity(next()?)?),
            },
            Rule::unit_stmt => StatementKind::Unit {
                name: self.declared_name(&next()?)?,
            },
            Rule::param_stmt => StatementKind::Param(self.declaration(next()?)?),
            Rule::factor_stmt => StatementKind::Factor(self.declaration(next()?)?),
            Rule::shock_stmt => {
                let mut names = Vec::new();
                for p in inner {
                    names.push(self.declared_name(&p)?);
                }
                StatementKind::Shock { names }
            }
            Rule::corr_stmt => {
                let first = self.ident(&next()?);
                let second = self.ident(&next()?);
                let value = self.expr(next()?)?;
                StatementKind::Corr {
                    first,
                    second,
                    value: Box::new(value),
                }
            }
            Rule::measure_stmt => StatementKind::Measure {
                name: self.ident(&next()?),
            },
            Rule::discount_stmt => StatementKind::Discount {
                rate: Box::new(self.expr(next()?)?),
            },
            Rule::let_stmt => StatementKind::Let {
                name: self.declared_name(&next()?)?,
                value: Box::new(self.expr(next()?)?),
            },
            Rule::expect_stmt => {
                let figure_pair = next()?;
                let mut rest: Vec<Pair<Rule>> = Vec::new();
                while let Ok(p) = next() {
                    rest.push(p);
                }
                StatementKind::Expect(Box::new(self.expect_statement(figure_pair, rest, &span)?))
            }
            Rule::equation => StatementKind::Equation(self.equation(next()?, next()?)?),
            _ => {
                return Err(syntax_error(span, "unrecognised statement"));
            }
        })
    }

    /// An `expect` line after its keyword: the figure, its arguments, and the condition
    /// that comes last.
    fn expect_statement(
        &mut self,
        figure_pair: Pair<Rule>,
        mut rest: Vec<Pair<Rule>>,
        span: &Span,
    ) -> Result<Expectation> {
        let condition_pair = rest
            .pop()
            .ok_or_else(|| syntax_error(span.clone(), "a condition is expected"))?;
        let args_span = match (rest.first(), rest.last()) {
            (Some(first), Some(last)) => self.span(first).start..self.span(last).end,
            _ => span.clone(),
        };
        let condition = self.condition(condition_pair)?;
        self.expectation(figure_pair, rest, args_span, condition)
    }

    /// `dX = TERMS`: the differential on the left, then the terms.
    fn equation(&mut self, lhs_pair: Pair<Rule>, terms_pair: Pair<Rule>) -> Result<Equation> {
        let lhs = self.span(&lhs_pair);
        let state = Ident {
            name: lhs_pair.as_str()[1..].to_string(),
            span: lhs.start + 1..lhs.end,
        };
        let terms = self.terms(terms_pair)?;
        Ok(Equation { state, lhs, terms })
    }

    pub(super) fn declaration(&mut self, pair: Pair<Rule>) -> Result<Declaration> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let name_pair = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a name is expected"))?;
        let name = self.declared_name(&name_pair)?;
        let value_pair = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a value is expected"))?;
        let value = if value_pair.as_rule() == Rule::literal_value {
            let mut parts = value_pair.into_inner();
            let number_pair = parts
                .next()
                .ok_or_else(|| syntax_error(span.clone(), "a value is expected"))?;
            let number = self.signed_number(number_pair)?;
            let unit = match parts.next() {
                Some(p) if p.as_rule() == Rule::bracket_unit => Some(self.bracket_unit(p)?),
                _ => None,
            }
            .map(Box::new);
            DeclaredValue::Literal { number, unit }
        } else {
            DeclaredValue::Expr(Box::new(self.expr(value_pair)?))
        };
        let mut bound = None;
        for p in inner {
            if p.as_rule() == Rule::bound {
                bound = Some(Box::new(self.bound(p)?));
            }
        }
        Ok(Declaration { name, value, bound })
    }

    pub(super) fn terms(&mut self, pair: Pair<Rule>) -> Result<Vec<Term>> {
        let mut terms = Vec::new();
        let mut sign = Sign::Plus;
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::add_op => {
                    sign = if p.as_str() == "+" {
                        Sign::Plus
                    } else {
                        Sign::Minus
                    };
                }
                _ => {
                    // A term with no differential is reported and left out; the rest
                    // of the equation is still analysed.
                    match self.term(sign, p) {
                        Ok(term) => terms.push(term),
                        Err(TermError::NoDifferential(e)) => self.soft.push(e),
                        Err(TermError::Spoils(e)) => return Err(e),
                    }
                    sign = Sign::Plus;
                }
            }
        }
        Ok(terms)
    }

    pub(super) fn term(
        &mut self,
        mut sign: Sign,
        pair: Pair<Rule>,
    ) -> std::result::Result<Term, TermError> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let product = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a term is expected"))?;
        let mut factors = self.factors(product)?;
        let juxtaposed = inner.next().and_then(|j| j.into_inner().next());
        let differential = if let Some(name_pair) = juxtaposed {
            let ident = self.ident(&name_pair);
            differential_of(&ident).ok_or_else(|| not_a_differential(&ident))?
        } else {
            let (op, last) = factors
                .pop()
                .ok_or_else(|| syntax_error(span.clone(), "a term is expected"))?;
            let (negated, bare) = strip_negations(&last);
            let differential = match bare {
                Expr::Name(ident) => differential_of(ident),
                _ => None,
            };
            let Some(differential) = differential else {
                return Err(TermError::NoDifferential(syntax_error(
                    span.clone(),
                    "this term has no differential",
                )
                .with_label("a term ends with `dt` or `dW`")
                .with_help("end the term with `dt` for drift or `dW` for diffusion on the shock `W`, e.g. `kappa * (level - x) dt`")));
            };
            if op == BinaryOp::Div {
                return Err(TermError::Spoils(
                    syntax_error(last.span(), "a differential cannot divide").with_help(
                        "write the differential as the last factor, multiplied: `vol * x dW`",
                    ),
                ));
            }
            if negated {
                sign = match sign {
                    Sign::Plus => Sign::Minus,
                    Sign::Minus => Sign::Plus,
                };
            }
            differential
        };
        let coefficient = fold_product(factors);
        Ok(Term {
            sign,
            coefficient,
            differential,
            span,
        })
    }
}

/// Why a term could not be read. A term with no differential spoils only itself: it is
/// reported and the rest of the equation is still read.
pub(super) enum TermError {
    NoDifferential(Diagnostic),
    Spoils(Diagnostic),
}

impl From<Diagnostic> for TermError {
    fn from(diagnostic: Diagnostic) -> Self {
        TermError::Spoils(diagnostic)
    }
}

/// `(negated an odd number of times, the expression without the negations)`.
pub(super) fn strip_negations(mut expr: &Expr) -> (bool, &Expr) {
    let mut negated = false;
    while let Expr::Neg { operand, .. } = expr {
        negated = !negated;
        expr = operand;
    }
    (negated, expr)
}

pub(super) fn differential_of(ident: &Ident) -> Option<Differential> {
    if ident.name == "dt" {
        return Some(Differential::Time(ident.span.clone()));
    }
    let rest = ident.name.strip_prefix('d')?;
    if rest.is_empty() || !rest.chars().next().is_some_and(is_ident_start) {
        return None;
    }
    Some(Differential::Shock {
        shock: Ident {
            name: rest.to_string(),
            span: ident.span.start + 1..ident.span.end,
        },
        token: ident.span.clone(),
    })
}

pub(super) fn not_a_differential(ident: &Ident) -> Diagnostic {
    syntax_error(
        ident.span.clone(),
        format!("`{}` is not a differential", ident.name),
    )
    .with_help("a term ends with `dt` (drift) or `dW` (diffusion on the shock `W`); write `*` between the numbers and names you multiply")
}
