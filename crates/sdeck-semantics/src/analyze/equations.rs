//! Stage 3, lowering equations: each `dX = ... dt + ... dW` split into drift and
//! diffusion terms of the model, each coefficient checked against the dimension the
//! factor needs.

use super::*;

impl Analyzer<'_> {
    pub(super) fn equations(&mut self) {
        let file = self.file;
        let mut first_equation: HashMap<FactorId, Span> = HashMap::new();
        for statement in &file.statements {
            let StatementKind::Equation(eq) = &statement.kind else {
                continue;
            };
            let factor_index = match self.names.get(&eq.state.name).cloned() {
                Some((Target::Factor(i), _)) => i,
                Some((_, decl)) => {
                    self.diagnostics.push(
                        Diagnostic::new(
                            &rules::MISSING_EQUATION,
                            eq.lhs.clone(),
                            format!(
                                "`d{}` names `{}`, which is not a factor",
                                eq.state.name, eq.state.name
                            ),
                        )
                        .with_related(decl, "declared here")
                        .with_help(format!(
                            "declare `{}` with `factor` and an initial value",
                            eq.state.name
                        )),
                    );
                    continue;
                }
                None => {
                    self.mark_uses(eq);
                    let mut d = Diagnostic::new(
                        &rules::MISSING_EQUATION,
                        eq.lhs.clone(),
                        format!("the equation `d{}` names no factor", eq.state.name),
                    );
                    d = match closest_name(
                        &eq.state.name,
                        self.model.factors.iter().map(|s| &s.name),
                    ) {
                        Some(close) => d.with_help(format!("did you mean `d{close}`?")),
                        None => d.with_help(format!(
                            "declare the factor first: `factor {} = 0`",
                            eq.state.name
                        )),
                    };
                    self.diagnostics.push(d);
                    continue;
                }
            };
            self.reference(&eq.state, &Target::Factor(factor_index));
            if let Some(prev) = first_equation.get(&factor_index) {
                self.diagnostics.push(
                    Diagnostic::new(
                        &rules::DUPLICATE_NAME,
                        eq.lhs.clone(),
                        format!("`{}` has a second equation", eq.state.name),
                    )
                    .with_related(prev.clone(), "first equation here")
                    .with_help("a factor has exactly one equation; merge the terms into one"),
                );
                continue;
            }
            first_equation.insert(factor_index, eq.lhs.clone());
            let equation = self.equation(factor_index, eq, &statement.span);
            self.model.factors[factor_index].equation = Some(equation);
        }
        self.structure.equation_unparsed = (self.model.factors.ids())
            .map(|i| self.equation_unparsed(i))
            .collect();
    }

    /// Whether text that did not parse may hold the equation of factor `i`: `dr = ...`,
    /// and the slips `d r = ...` and `dr/dt = ...`.
    pub(super) fn equation_unparsed(&self, i: FactorId) -> bool {
        self.file.unparsed.iter().any(|span| {
            let text = self.source.get(span.clone()).unwrap_or("");
            text.strip_prefix('d')
                .map(str::trim_start)
                .and_then(|rest| rest.strip_prefix(self.model.factors[i].name.as_str()))
                .is_some_and(|rest| {
                    let rest = rest.trim_start();
                    rest.starts_with('=') || rest.starts_with('/')
                })
        })
    }

    /// Resolves the terms of an equation that names no state, so that what it uses is
    /// not also reported as unused. Errors inside it are still reported.
    pub(super) fn mark_uses(&mut self, eq: &ast::Equation) {
        for term in &eq.terms {
            if let Some(c) = &term.coefficient {
                self.resolve(c);
            }
            if let ast::Differential::Shock { shock: noise, .. } = &term.differential {
                if let Some((Target::Shock(i), _)) = self.names.get(&noise.name).cloned() {
                    self.noise_used[i] = true;
                    self.reference(noise, &Target::Shock(i));
                }
            }
        }
    }

    /// The equation of factor `state`: each term resolved, its coefficient checked
    /// against the dimension the factor needs; a term whose differential an earlier
    /// term already ends with is set aside for `duplicate-term`.
    pub(super) fn equation(
        &mut self,
        state: FactorId,
        eq: &ast::Equation,
        span: &Span,
    ) -> Equation {
        let mut drift: Option<(Expr, Span)> = None;
        let mut diffusion: Vec<DiffusionTerm> = Vec::new();
        let mut first_terms: HashMap<Differential, Span> = HashMap::new();
        for term in &eq.terms {
            self.expanded = 0;
            let (coefficient, dim) = match &term.coefficient {
                Some(c) => self.resolve(c),
                None => (Expr::Const(1.0), Some(Dimension::dimensionless())),
            };
            let coefficient = match term.sign {
                ast::Sign::Plus => coefficient,
                ast::Sign::Minus => Expr::Neg(Box::new(coefficient)),
            };
            let differential = match &term.differential {
                ast::Differential::Time(_) => Differential::Time,
                ast::Differential::Shock {
                    shock: noise,
                    token,
                } => match self.names.get(&noise.name).cloned() {
                    Some((Target::Shock(i), _)) => {
                        self.reference(noise, &Target::Shock(i));
                        Differential::Shock(i)
                    }
                    other => {
                        let d = self.unknown_differential(noise, token, other.is_some());
                        self.diagnostics.push(d);
                        continue;
                    }
                },
            };
            if let Some(first) = first_terms.get(&differential) {
                self.structure.repeated_terms.push(RepeatedTerm {
                    factor: state,
                    differential,
                    span: term.span.clone(),
                    first: first.clone(),
                });
                continue;
            }
            first_terms.insert(differential, term.span.clone());
            if let Differential::Shock(i) = differential {
                self.noise_used[i] = true;
            }
            if let (Some(d), true) = (&dim, self.state_unit_ok[state]) {
                self.check_coefficient(term, d, state, differential == Differential::Time);
            }
            match differential {
                Differential::Time => drift = Some((coefficient, term.span.clone())),
                Differential::Shock(noise) => diffusion.push(DiffusionTerm {
                    noise,
                    coefficient,
                    span: term.span.clone(),
                }),
            }
        }
        let (drift, drift_span) = match drift {
            Some((expr, span)) => (expr, Some(span)),
            None => (Expr::Const(0.0), None),
        };
        Equation {
            span: span.clone(),
            lhs_span: eq.lhs.clone(),
            drift,
            drift_span,
            diffusion,
        }
    }

    /// The `dimension-mismatch` of a term whose coefficient is not the factor's
    /// dimension per unit of clock time (drift) or per its square root (diffusion), with
    /// a fix that declares the parameter to blame in the unit that mends it.
    pub(super) fn check_coefficient(
        &mut self,
        term: &ast::Term,
        found: &Dimension,
        factor: FactorId,
        is_drift: bool,
    ) {
        let state_dim = self.model.factors[factor].dimension.clone();
        let per_time = if is_drift {
            Dimension::time()
        } else {
            Dimension::time().sqrt()
        };
        let needed = &state_dim.div(&per_time);
        if found == needed {
            return;
        }
        let state = self.model.factors[factor].name.clone();
        let clock = self.clock_unit().to_string();
        let span = term
            .coefficient
            .as_ref()
            .map(|c| c.span())
            .unwrap_or(term.span.clone());
        let (which, per, state_words) = coefficient_words(&state, &state_dim, is_drift);
        // Which parameter would mend it, if the coefficient is a product with one.
        let culprit = term.coefficient.as_ref().and_then(|c| self.factor_param(c));
        let message;
        let mut d;
        if let Some((param_index, ident_span)) = culprit {
            let p = &self.model.params[param_index];
            let wanted = needed.div(found).mul(&p.dimension);
            let suggestion = suggest_unit_text(&wanted, &clock);
            message = if found.div(&p.dimension).is_dimensionless() {
                // The coefficient is the parameter alone (up to numbers).
                format!(
                    "`{}` is {}, but the {which} of {state_words} must be {} ({which} is the factor's dimension {per}): did you mean [{suggestion}]?",
                    p.name,
                    p.dimension.describe(),
                    needed.describe(),
                )
            } else {
                format!(
                    "the {which} coefficient of {state_words} is {}, but must be {} ({which} is the factor's dimension {per}); if `{}` is the culprit, did you mean [{suggestion}]?",
                    found.describe(),
                    needed.describe(),
                    p.name,
                )
            };
            d = dimension_error(span, message).with_label(format!("{} here", found.describe()));
            d = d.with_related(
                ident_span,
                format!(
                    "`{}` is declared in [{}]",
                    p.name,
                    p.unit_text.clone().unwrap_or_else(|| "1".to_string())
                ),
            );
            let edit = self.unit_edit(param_index, &suggestion);
            let title = format!("Declare `{}` in [{suggestion}]", p.name);
            d = d.with_fix(title, vec![edit]);
        } else {
            message = format!(
                "the {which} coefficient of {state_words} is {}, but must be {} ({which} is the factor's dimension {per})",
                found.describe(),
                needed.describe()
            );
            d = dimension_error(span, message)
                .with_label(format!("{} here", found.describe()))
                .with_help(format!(
                    "write its parameters so the coefficient comes out in [{}]",
                    suggest_unit_text(needed, &clock)
                ));
        }
        self.diagnostics.push(d);
    }

    /// The edit that declares the parameter `param_index` in `[unit]`: its unit rewritten,
    /// or one written after its value.
    fn unit_edit(&self, param_index: ParamId, unit: &str) -> TextEdit {
        if let Some(Some((unit_span, _))) = self.param_units.by_id(param_index) {
            return TextEdit {
                span: unit_span.clone(),
                new_text: unit.to_string(),
            };
        }
        let at = self.model.params[param_index].span.clone();
        let value_end = self.param_value_end(param_index).unwrap_or(at.end);
        TextEdit {
            span: value_end..value_end,
            new_text: format!(" [{unit}]"),
        }
    }

    pub(super) fn param_value_end(&self, param_index: ParamId) -> Option<usize> {
        let name = &self.model.params[param_index].name;
        self.file.statements.iter().find_map(|s| match &s.kind {
            StatementKind::Param(decl) if &decl.name.name == name => Some(decl.value_span().end),
            _ => None,
        })
    }

    /// The first parameter that appears as a factor at the top of a product.
    pub(super) fn factor_param(&self, e: &ast::Expr) -> Option<(ParamId, Span)> {
        match e {
            ast::Expr::Name(ident) => match self.names.get(&ident.name) {
                Some((Target::Param(i), decl)) => Some((*i, decl.clone())),
                _ => None,
            },
            ast::Expr::Neg { operand, .. } | ast::Expr::Paren { inner: operand, .. } => {
                self.factor_param(operand)
            }
            ast::Expr::Binary {
                op: ast::BinaryOp::Mul | ast::BinaryOp::Div,
                lhs,
                rhs,
                ..
            } => self.factor_param(lhs).or_else(|| match **rhs {
                ast::Expr::Name(_) => self.factor_param(rhs),
                _ => None,
            }),
            _ => None,
        }
    }

    /// `dX` ending a term where `X` is no shock (`is_name`: a declared name of another
    /// kind), with the fix that writes a similar shock's name or declares the shock.
    fn unknown_differential(&self, noise: &ast::Ident, token: &Span, is_name: bool) -> Diagnostic {
        let token_text = format!("d{}", noise.name);
        let mut d = Diagnostic::new(
            &rules::UNKNOWN_NAME,
            token.clone(),
            match is_name {
                true => format!(
                    "`{token_text}` ends a term, but `{}` is not a shock",
                    noise.name
                ),
                false => format!(
                    "`{token_text}` ends a term, but no shock `{}` is declared",
                    noise.name
                ),
            },
        );
        let similar = (!is_name)
            .then(|| closest_name(&noise.name, self.model.shocks.iter().map(|n| &n.name)))
            .flatten();
        if self.names.contains_key(&token_text) {
            d = d.with_help(format!("`{token_text}` is a declared name; a term must end with `dt` or `dW`; write the differential after it: `{token_text} * ... dt`"));
        } else if let Some(close) = similar {
            d = d
                .with_help(format!(
                    "did you mean `d{close}`? (or declare the shock with `shock {}`)",
                    noise.name
                ))
                .with_fix(
                    format!("Write `d{close}`"),
                    vec![TextEdit {
                        span: noise.span.clone(),
                        new_text: close,
                    }],
                );
        } else {
            d = d.with_help(format!("declare the shock with `shock {}`", noise.name));
            let insert_at = self
                .model
                .factors
                .first()
                .map(|s| line_start_of(self.source, s.span.start))
                .unwrap_or(0);
            d = d.with_fix(
                format!("Declare `shock {}`", noise.name),
                vec![TextEdit {
                    span: insert_at..insert_at,
                    new_text: format!("shock {}\n", noise.name),
                }],
            );
        }
        d
    }
}

/// How a coefficient's mismatch names the term and the factor: `drift` or `diffusion`,
/// per what, and `the factor `S` (currency)`.
fn coefficient_words(
    state: &str,
    state_dim: &Dimension,
    is_drift: bool,
) -> (&'static str, &'static str, String) {
    let which = if is_drift { "drift" } else { "diffusion" };
    let per = if is_drift {
        "per unit of clock time"
    } else {
        "per square root of clock time"
    };
    let state_words = if state_dim.is_dimensionless() {
        format!("the dimensionless factor `{state}`")
    } else {
        format!("the factor `{state}` ({})", state_dim.describe())
    };
    (which, per, state_words)
}
