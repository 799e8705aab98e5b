//! Stage 3, lowering `expect` statements: the figure, its factor, its time, level and
//! admissible values converted to the clock, and how messages show them.

use super::*;

impl Analyzer<'_> {
    pub(super) fn expectations(&mut self) {
        let file = self.file;
        for statement in &file.statements {
            let StatementKind::Expect(x) = &statement.kind else {
                continue;
            };
            if let Some(e) = self.expectation(x, statement.span.clone()) {
                self.model.expectations.push(e);
            }
        }
    }

    /// A value of the factor `state` as written in an expectation (a level of `prob`, a
    /// bound of `quantile`), converted to clock units; `what` names it in messages.
    pub(super) fn factor_value(
        &mut self,
        state: FactorId,
        q: &ast::Quantity,
        what: &str,
    ) -> Option<f64> {
        let dim = self.model.factors[state].dimension.clone();
        let scale = self.model.factors[state].scale;
        let Some(unit) = &q.unit else {
            return Some(q.number.value * scale);
        };
        let v = self.eval_unit(unit)?;
        if v.dimension != dim {
            self.diagnostics.push(
                dimension_error(
                    unit.span(),
                    format!(
                        "`{}` is {}, but {what} is {}",
                        self.model.factors[state].name,
                        dim.describe(),
                        v.dimension.describe()
                    ),
                )
                .with_help(format!(
                    "write {what} in [{}]",
                    suggest_unit_text(&dim, self.clock_unit())
                )),
            );
            return None;
        }
        Some(q.number.value * v.scale)
    }

    /// A number that must be dimensionless (a probability, a price); `what` names it.
    pub(super) fn plain_value(&mut self, q: &ast::Quantity, what: &str) -> Option<f64> {
        let Some(unit) = &q.unit else {
            return Some(q.number.value);
        };
        let v = self.eval_unit(unit)?;
        if v.dimension != Dimension::dimensionless() {
            self.diagnostics.push(
                dimension_error(
                    unit.span(),
                    format!(
                        "{what} is a pure number, but this one is {}",
                        v.dimension.describe()
                    ),
                )
                .with_help(format!("write it without a unit, e.g. `{}`", q.number.text)),
            );
            return None;
        }
        Some(q.number.value * v.scale)
    }

    /// A yield or forward rate as an annual decimal: a plain number (`3%`) is per year,
    /// the trade's convention; a rate in `[1/TIME]` converts.
    pub(super) fn annual_rate(&mut self, q: &ast::Quantity, what: &str) -> Option<f64> {
        let Some(unit) = &q.unit else {
            return Some(q.number.value);
        };
        let v = self.eval_unit(unit)?;
        if v.dimension == Dimension::dimensionless() {
            return Some(q.number.value * v.scale);
        }
        if v.dimension != Dimension::dimensionless().div(&Dimension::time()) {
            self.diagnostics.push(
                dimension_error(
                    unit.span(),
                    format!(
                        "{what} is a rate per year or per unit of time, but this bound is {}",
                        v.dimension.describe()
                    ),
                )
                .with_help(
                    "write it as an annual decimal (`3.5%`) or with a unit such as `[1/year]`",
                ),
            );
            return None;
        }
        // v.scale converts to per clock unit; per year divides by the clock in years.
        Some(q.number.value * v.scale / self.model.clock.years)
    }

    pub(super) fn expectation(&mut self, x: &ast::Expectation, span: Span) -> Option<Expectation> {
        let state = match &x.state {
            Some(ident) => Some(self.expected_factor(ident)?),
            None => None,
        };
        let at = self.expectation_time(x)?;
        let level = self.expectation_level(x, state)?;
        let (shown, level_shown) = self.expectation_shown(x, state);
        let at_text = x.at.as_ref().and_then(|q| {
            let text = self.source.get(q.span.clone())?;
            Some(text.split_whitespace().collect::<Vec<_>>().join(" "))
        });
        let admissible = self.admissible(x, state)?;
        Some(Expectation {
            figure: x.figure,
            state,
            side: x.side,
            level,
            at,
            at_text,
            admissible,
            shown,
            level_shown,
            span,
        })
    }

    /// The time of an expectation (the maturity of a curve figure), converted to the
    /// clock; `Some(None)` when none is written, `None` after an error.
    fn expectation_time(&mut self, x: &ast::Expectation) -> Option<Option<f64>> {
        let Some(q) = &x.at else {
            return Some(None);
        };
        let what = if x.figure.on_curve() {
            "the maturity"
        } else {
            "the time of an expectation"
        };
        let t = self.time_quantity(q, what)?;
        let allowed = if x.figure.on_curve() {
            t > 0.0
        } else {
            t >= 0.0
        };
        if !allowed {
            self.diagnostics.push(
                Diagnostic::new(
                    &rules::BOUND_VIOLATED,
                    q.span.clone(),
                    if x.figure.on_curve() {
                        "the maturity of a bond must be a positive time"
                    } else {
                        "the time of an expectation must not be negative"
                    },
                )
                .with_help("write a time from now, e.g. `1 year`"),
            );
            return None;
        }
        Some(Some(t))
    }

    /// The level of `prob` in the factor's clock units, or the probability of `quantile`;
    /// `Some(None)` when none is written, `None` after an error.
    fn expectation_level(
        &mut self,
        x: &ast::Expectation,
        state: Option<FactorId>,
    ) -> Option<Option<f64>> {
        let level = match (&x.level, state) {
            (Some(q), Some(i)) if x.figure == Figure::Prob => {
                Some(self.factor_value(i, q, "the level")?)
            }
            (Some(q), _) => {
                let p = self.plain_value(q, "the probability of a quantile")?;
                if !(p > 0.0 && p < 1.0) {
                    self.diagnostics.push(
                        Diagnostic::new(
                            &rules::BOUND_VIOLATED,
                            q.span.clone(),
                            format!(
                                "the probability of a quantile must lie strictly between 0 and 1, not {}",
                                q.number.text
                            ),
                        )
                        .with_help("write a probability such as `99%` or `0.05`"),
                    );
                    return None;
                }
                Some(p)
            }
            (None, _) => None,
        };
        Some(level)
    }

    /// How messages show the figure and the level: as the bounds are written.
    fn expectation_shown(&self, x: &ast::Expectation, state: Option<FactorId>) -> (Shown, Shown) {
        let written_percent = match &x.condition {
            ast::Condition::Compare { value, .. } => value.number.text.ends_with('%'),
            ast::Condition::Within { lower, upper, .. } => {
                lower.number.text.ends_with('%') || upper.number.text.ends_with('%')
            }
        };
        let factor_shown = |this: &Self, i: FactorId, percent: bool| {
            let factor = &this.model.factors[i];
            if factor.dimension == Dimension::dimensionless() && percent {
                Shown::Percent
            } else {
                Shown::Scaled {
                    scale: factor.scale,
                    unit: factor.unit_text.clone(),
                }
            }
        };
        let level_shown = match (x.figure, state, &x.level) {
            (Figure::Prob, Some(i), Some(q)) => factor_shown(self, i, q.number.text.ends_with('%')),
            (Figure::Quantile, _, _) => Shown::Percent,
            _ => Shown::Clock,
        };
        let shown = match (x.figure, state) {
            (Figure::Prob | Figure::Yield | Figure::Forward, _) => Shown::Percent,
            (Figure::Price, _) => Shown::Scaled {
                scale: 1.0,
                unit: None,
            },
            (Figure::Quantile, Some(i)) => factor_shown(self, i, written_percent),
            (figure, Some(i)) => self.moment_shown(figure, i, &x.condition),
            _ => Shown::Clock,
        };
        (shown, level_shown)
    }

    /// The admissible values of the figure, converted to its clock units; `None` after
    /// an error.
    fn admissible(&mut self, x: &ast::Expectation, state: Option<FactorId>) -> Option<Interval> {
        let figure_name = match &x.state {
            Some(s) => format!("{}({})", x.figure.keyword(), s.name),
            None => format!("{}(…)", x.figure.keyword()),
        };
        let convert = |this: &mut Self, q: &ast::Quantity| -> Option<f64> {
            match x.figure {
                Figure::Prob => {
                    this.plain_value(q, &format!("the bound of a probability `{figure_name}`"))
                }
                Figure::Price => this.plain_value(q, "the bound of a bond price"),
                Figure::Yield | Figure::Forward => {
                    this.annual_rate(q, &format!("`{}`", x.figure.keyword()))
                }
                _ => {
                    let i = state?;
                    this.moment_bound(x.figure, i, q, &figure_name)
                }
            }
        };
        let admissible = match &x.condition {
            ast::Condition::Compare { op, value } => {
                let v = convert(self, value)?;
                match op {
                    ast::Comparison::Less => Interval {
                        lower: None,
                        upper: Some((v, false)),
                    },
                    ast::Comparison::LessEqual => Interval {
                        lower: None,
                        upper: Some((v, true)),
                    },
                    ast::Comparison::Greater => Interval {
                        lower: Some((v, false)),
                        upper: None,
                    },
                    ast::Comparison::GreaterEqual => Interval {
                        lower: Some((v, true)),
                        upper: None,
                    },
                }
            }
            ast::Condition::Within {
                lower,
                lower_inclusive,
                upper,
                upper_inclusive,
            } => {
                let (Some(a), Some(b)) = (convert(self, lower), convert(self, upper)) else {
                    return None;
                };
                Interval {
                    lower: Some((a, *lower_inclusive)),
                    upper: Some((b, *upper_inclusive)),
                }
            }
        };
        Some(admissible)
    }

    /// How a message shows a moment or a half-life: as the bound is written. A mean or sd
    /// of a dimensionless factor bounded in `%` or `bp` is shown in %/bp; a half-life
    /// bounded in a time unit (`10 day`) in that unit; anything else in clock units.
    pub(super) fn moment_shown(
        &self,
        figure: Figure,
        state: FactorId,
        condition: &ast::Condition,
    ) -> Shown {
        let bounds: Vec<&ast::Quantity> = match condition {
            ast::Condition::Compare { value, .. } => vec![value],
            ast::Condition::Within { lower, upper, .. } => vec![lower, upper],
        };
        let dimensionless = self
            .model
            .factors
            .by_id(state)
            .is_some_and(|f| f.dimension == Dimension::dimensionless());
        match figure {
            Figure::Mean | Figure::Sd | Figure::StationaryMean | Figure::StationarySd
                if dimensionless =>
            {
                if bounds.iter().any(|q| q.number.text.ends_with('%')) {
                    Shown::Percent
                } else if bounds.iter().any(|q| q.number.text.ends_with("bp")) {
                    Shown::BasisPoints
                } else {
                    Shown::Clock
                }
            }
            Figure::Halflife => bounds
                .iter()
                .find_map(|q| {
                    let unit = q.unit.as_ref()?;
                    let text = self.source.get(unit.span())?.trim();
                    let text = text.trim_start_matches('[').trim_end_matches(']').trim();
                    let years = sdeck_units::time_units::time_unit_years(text)?;
                    Some(Shown::Time {
                        scale: years / self.model.clock.years,
                        unit: text.to_string(),
                    })
                })
                .unwrap_or(Shown::Clock),
            _ => Shown::Clock,
        }
    }

    /// A bound of a figure of the factor `state` (its moments, half-life, quantile) in
    /// clock units: a bare number is in the factor's unit (a time for the half-life).
    pub(super) fn moment_bound(
        &mut self,
        figure: Figure,
        state: FactorId,
        q: &ast::Quantity,
        figure_name: &str,
    ) -> Option<f64> {
        let state_dim = self.model.factors[state].dimension.clone();
        let state_scale = self.model.factors[state].scale;
        let (figure_dim, figure_scale) = match figure {
            Figure::Variance | Figure::StationaryVariance => {
                (state_dim.mul(&state_dim), state_scale * state_scale)
            }
            Figure::Halflife => (Dimension::time(), 1.0),
            _ => (state_dim.clone(), state_scale),
        };
        match &q.unit {
            None => Some(
                q.number.value
                    * if figure_dim == Dimension::time() {
                        1.0
                    } else {
                        figure_scale
                    },
            ),
            Some(unit) => {
                let v = self.eval_unit(unit)?;
                if v.dimension != figure_dim {
                    self.diagnostics.push(
                        dimension_error(
                            unit.span(),
                            format!(
                                "`{figure_name}` is {}, but this bound is {}",
                                figure_dim.describe(),
                                v.dimension.describe()
                            ),
                        )
                        .with_help(format!(
                            "write the bound in [{}]",
                            suggest_unit_text(&figure_dim, self.clock_unit())
                        )),
                    );
                    return None;
                }
                Some(q.number.value * v.scale)
            }
        }
    }
}
