//! Stage 3, lowering to the model the calculus reads: lets resolved (and inlined where
//! they are used), correlations, the measure and the short rate.

use super::*;

impl Analyzer<'_> {
    pub(super) fn resolve_lets(&mut self) {
        for i in (0..self.model.lets.len()).map(LetId::new) {
            self.resolve_let(i);
        }
    }

    pub(super) fn resolve_let(&mut self, index: LetId) {
        match self.let_progress[index] {
            LetProgress::Done => return,
            LetProgress::Busy => {
                let let_decl = &self.model.lets[index];
                self.diagnostics.push(
                    Diagnostic::new(
                        &rules::UNKNOWN_NAME,
                        let_decl.name_span.clone(),
                        format!("`{}` is defined in terms of itself", let_decl.name),
                    )
                    .with_help("a let may use parameters, factors, `t` and other lets, but not form a cycle"),
                );
                self.let_progress[index] = LetProgress::Done;
                return;
            }
            LetProgress::Pending => {}
        }
        self.let_progress[index] = LetProgress::Busy;
        let ast = self.let_asts[index];
        let outer = std::mem::replace(&mut self.expanded, 0);
        let (expr, dimension) = self.resolve(ast);
        self.let_sizes[index] = self.expanded;
        self.expanded = outer;
        let l = &mut self.model.lets[index];
        l.value = expr;
        l.dimension = dimension;
        self.let_progress[index] = LetProgress::Done;
    }

    pub(super) fn correlations(&mut self) {
        let file = self.file;
        let mut seen: HashMap<(ShockId, ShockId), Span> = HashMap::new();
        for statement in &file.statements {
            let StatementKind::Corr {
                first,
                second,
                value,
            } = &statement.kind
            else {
                continue;
            };
            self.correlation(statement, first, second, value, &mut seen);
        }
    }

    /// `corr A, B = VALUE`: recorded for `correlation-range` when both names are shocks,
    /// and kept in the model when it relates two shocks by a value in [-1, 1] given once.
    fn correlation(
        &mut self,
        statement: &ast::Statement,
        first: &ast::Ident,
        second: &ast::Ident,
        value: &ast::Expr,
        seen: &mut HashMap<(ShockId, ShockId), Span>,
    ) {
        let a = self.noise_named(first);
        let b = self.noise_named(second);
        let (Some(a), Some(b)) = (a, b) else { return };
        let mut written = WrittenCorrelation {
            first: a,
            second: b,
            span: statement.span.clone(),
            value_span: value.span(),
            value: None,
            written_as_number: false,
        };
        if written.is_self() {
            self.structure.correlations.push(written);
            return;
        }
        let (expr, dimension) = self.constant_expression(
            value,
            Constant {
                what: format!("the correlation of `{}` and `{}`", first.name, second.name),
                declaration: false,
                param_keyword: None,
            },
        );
        if let Some(d) = dimension.as_ref().filter(|d| !d.is_dimensionless()) {
            self.diagnostics.push(
                dimension_error(
                    value.span(),
                    format!(
                        "the correlation of `{}` and `{}` must be a pure number, but this one is {}",
                        first.name,
                        second.name,
                        d.describe()
                    ),
                )
                .with_help("write a number between -1 and 1, or a dimensionless parameter"),
            );
            return;
        }
        if dimension.is_none() || expr.is_invalid() {
            return;
        }
        let rho = expr.eval(&self.model.param_values(), &[], 0.0);
        written.value = Some(rho);
        written.written_as_number = matches!(expr, Expr::Const(_)) || is_negated_number(value);
        let kept = written.is_correlation();
        self.structure.correlations.push(written);
        if !kept {
            return;
        }
        let mut mentioned = Vec::new();
        expr.params(&mut mentioned);
        let key = (a.min(b), a.max(b));
        if let Some(prev) = seen.get(&key) {
            self.diagnostics
                .push(given_twice(statement, first, second, prev.clone()));
            return;
        }
        seen.insert(key, statement.span.clone());
        self.model.correlations.push(Correlation {
            first: a,
            second: b,
            value: rho,
            span: statement.span.clone(),
            value_span: value.span(),
            expr: (!mentioned.is_empty()).then_some(expr),
        });
    }

    /// `measure` and `discount`: the rate is read per year when dimensionless and per
    /// its own time unit when its dimension is 1/time.
    pub(super) fn short_rate(&mut self) {
        let file = self.file;
        for statement in &file.statements {
            match &statement.kind {
                StatementKind::Measure { name } => {
                    let measure = match name.name.as_str() {
                        "risk-neutral" => MeasureKind::RiskNeutral,
                        _ => MeasureKind::RealWorld,
                    };
                    if self.model.measure.is_some() {
                        self.diagnostics.push(
                            Diagnostic::new(
                                &rules::DUPLICATE_NAME,
                                statement.span.clone(),
                                "the measure is stated twice",
                            )
                            .with_help("keep one `measure` line"),
                        );
                        continue;
                    }
                    self.model.measure = Some(Measure {
                        measure,
                        span: statement.span.clone(),
                    });
                }
                StatementKind::Discount { rate } => {
                    let (expr, dimension) = self.resolve(rate);
                    if self.model.discount.is_some() {
                        self.diagnostics.push(
                            Diagnostic::new(
                                &rules::DUPLICATE_NAME,
                                statement.span.clone(),
                                "the short rate is given twice",
                            )
                            .with_help("keep one `discount` line"),
                        );
                        continue;
                    }
                    let per_time = Dimension::dimensionless().div(&Dimension::time());
                    let years = self.model.clock.years;
                    let (rate_expr, per_year) = match dimension {
                        Some(d) if d == Dimension::dimensionless() => {
                            let converted = if years == 1.0 {
                                expr
                            } else {
                                Expr::Mul(Box::new(expr), Box::new(Expr::Const(years)))
                            };
                            (converted, true)
                        }
                        Some(d) if d == per_time => (expr, false),
                        Some(d) => {
                            self.diagnostics.push(
                                Diagnostic::new(
                                    &rules::DIMENSION_MISMATCH,
                                    rate.span(),
                                    format!(
                                        "a short rate is a number per year or has the \
                                         dimension 1/time, not {d}"
                                    ),
                                )
                                .with_help(
                                    "write the rate as a fraction per year (`discount r` with \
                                     r = 3%) or in [1/year]",
                                ),
                            );
                            (Expr::Invalid, true)
                        }
                        None => (Expr::Invalid, true),
                    };
                    self.model.discount = Some(Discount {
                        rate: rate_expr,
                        span: statement.span.clone(),
                        per_year,
                    });
                }
                _ => {}
            }
        }
    }
}

/// A second `corr` statement for the shocks `first` and `second` (the first at `prev`).
fn given_twice(
    statement: &ast::Statement,
    first: &ast::Ident,
    second: &ast::Ident,
    prev: Span,
) -> Diagnostic {
    Diagnostic::new(
        &rules::DUPLICATE_NAME,
        statement.span.clone(),
        format!(
            "the correlation of `{}` and `{}` is given twice",
            first.name, second.name
        ),
    )
    .with_related(prev, "first given here")
    .with_help("keep one `corr` statement per pair of shocks")
}
