//! `expect` lines: the figure, its arguments and the condition.

use super::pest_errors::example;
use super::{is_keyword_token, syntax_error, Builder, Result, Rule};
use crate::ast::*;
use pest::iterators::Pair;
use sdeck_diagnostics::Span;

impl Builder {
    /// The figure and arguments of an `expect` line. Each figure takes its own arguments
    /// (see [`Figure::form`]).
    pub(super) fn expectation(
        &mut self,
        figure_pair: Pair<Rule>,
        args: Vec<Pair<Rule>>,
        args_span: Span,
        condition: Condition,
    ) -> Result<Expectation> {
        let figure_span = self.span(&figure_pair);
        let figure = figure_of(&figure_pair, &figure_span)?;
        let mut x = Expectation {
            figure,
            figure_span,
            state: None,
            side: None,
            level: None,
            at: None,
            condition,
        };
        let rules: Vec<Rule> = args.iter().map(Pair::as_rule).collect();
        let mut args = args.into_iter();
        self.arguments(&mut x, &rules, &mut args, &args_span)?;
        if let Some(q) = args.next() {
            x.at = Some(self.time_argument(&x, q)?);
        }
        Ok(x)
    }

    /// Reads the arguments before the optional time into `x`, by the figure and the
    /// rules of the arguments; an error on all of them (`args_span`) when they do not
    /// have the figure's shape.
    fn arguments<'i>(
        &mut self,
        x: &mut Expectation,
        rules: &[Rule],
        args: &mut impl Iterator<Item = Pair<'i, Rule>>,
        args_span: &Span,
    ) -> Result<()> {
        let figure = x.figure;
        let shape = |what: String| {
            syntax_error(args_span.clone(), what).with_help(format!(
                "write `{}`, e.g. `{}`",
                figure.form(),
                example(figure)
            ))
        };
        match (figure, rules) {
            (Figure::Prob, [Rule::threshold] | [Rule::threshold, Rule::quantity]) => {
                let threshold = args.next().map(Pair::into_inner);
                let mut parts = threshold.into_iter().flatten();
                let (Some(name), Some(op), Some(level)) =
                    (parts.next(), parts.next(), parts.next())
                else {
                    return Err(shape(
                        "a factor, `<` or `>` and a level are expected".into(),
                    ));
                };
                x.state = Some(self.ident(&name));
                x.side = Some(self.threshold_side(&op)?);
                x.level = Some(self.quantity(level)?);
            }
            (Figure::Prob, _) => {
                return Err(shape(
                    "`prob` takes a comparison of a factor with a level, then an optional time"
                        .into(),
                ))
            }
            (
                Figure::Quantile,
                [Rule::name, Rule::quantity] | [Rule::name, Rule::quantity, Rule::quantity],
            ) => {
                if let Some(name) = args.next() {
                    x.state = Some(self.ident(&name));
                }
                if let Some(p) = args.next() {
                    x.level = Some(self.quantity(p)?);
                }
            }
            (Figure::Quantile, _) => {
                return Err(shape(
                    "`quantile` takes a factor, a probability and an optional time".into(),
                ))
            }
            (Figure::Price | Figure::Yield | Figure::Forward, [Rule::quantity]) => {}
            (Figure::Price | Figure::Yield | Figure::Forward, _) => {
                return Err(shape(format!(
                    "`{}` belongs to the curve of the `discount` rate and takes one maturity",
                    figure.keyword()
                )))
            }
            (_, [Rule::name] | [Rule::name, Rule::quantity]) => {
                if let Some(name) = args.next() {
                    x.state = Some(self.ident(&name));
                }
            }
            (_, _) => {
                return Err(shape(format!(
                    "`{}` takes a factor{}",
                    figure.keyword(),
                    if figure.takes_time() {
                        " and an optional time"
                    } else {
                        ""
                    }
                )))
            }
        }
        Ok(())
    }

    /// The side of a `prob` threshold: `<` or `>`; `<=` and `>=` are refused.
    fn threshold_side(&self, op: &Pair<Rule>) -> Result<crate::ast::Side> {
        match op.as_str() {
            "<" => Ok(crate::ast::Side::Below),
            ">" => Ok(crate::ast::Side::Above),
            other => Err(
                syntax_error(self.span(op), format!("`{other}` is not taken in `prob`")).with_help(
                    format!(
                "the laws are continuous, so the probability is the same with `{}`; write that",
                &other[..1]
            ),
                ),
            ),
        }
    }

    /// The time argument that ends the arguments, refused for a figure that does not
    /// depend on time.
    fn time_argument(&mut self, x: &Expectation, pair: Pair<Rule>) -> Result<Quantity> {
        let q = self.quantity(pair)?;
        let figure = x.figure;
        if !figure.takes_time() {
            let state = x.state.as_ref().map_or("", |s| s.name.as_str());
            return Err(syntax_error(
                q.span.clone(),
                format!(
                    "`{}` does not depend on time and takes no time argument",
                    figure.keyword()
                ),
            )
            .with_help(format!("write `{}({state})`", figure.keyword())));
        }
        Ok(q)
    }

    pub(super) fn condition(&mut self, pair: Pair<Rule>) -> Result<Condition> {
        let span = self.span(&pair);
        let parts: Vec<Pair<Rule>> = pair
            .into_inner()
            .filter(|p| !is_keyword_token(p.as_rule()))
            .collect();
        match parts.as_slice() {
            [op, value] => {
                let op = match op.as_str() {
                    "<" => Comparison::Less,
                    "<=" => Comparison::LessEqual,
                    ">" => Comparison::Greater,
                    _ => Comparison::GreaterEqual,
                };
                Ok(Condition::Compare {
                    op,
                    value: self.quantity(value.clone())?,
                })
            }
            [open, a, b, close] => Ok(Condition::Within {
                lower: self.quantity(a.clone())?,
                lower_inclusive: open.as_str() == "[",
                upper: self.quantity(b.clone())?,
                upper_inclusive: close.as_str() == "]",
            }),
            _ => Err(syntax_error(
                span,
                "a condition such as `< 6 month` or `in [a, b]` is expected",
            )),
        }
    }
}

/// The figure an `expect` line pins, from its word.
fn figure_of(figure_pair: &Pair<Rule>, figure_span: &Span) -> Result<Figure> {
    Figure::from_keyword(figure_pair.as_str()).ok_or_else(|| {
        syntax_error(
            figure_span.clone(),
            format!(
                "`{}` is not a figure that can be pinned",
                figure_pair.as_str()
            ),
        )
        .with_help(
            "the figures are mean, variance, sd, halflife, stationary_mean, \
             stationary_variance, stationary_sd, prob, quantile, price, yield and forward",
        )
    })
}
