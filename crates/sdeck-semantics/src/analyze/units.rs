//! Stage 2, units: every expression resolved with its dimension inferred, and every
//! quantity converted to the clock; the `dimension-mismatch` diagnostics arise here, with
//! what a constant expression (a declared value, a correlation) may not use and the slips
//! that look like a call of a function (`kappa(theta - r)`, `ln`).

use super::*;

impl Analyzer<'_> {
    /// A quantity that must be a time, converted to clock units. A number with no unit is
    /// taken in clock units.
    pub(super) fn time_quantity(&mut self, q: &ast::Quantity, what: &str) -> Option<f64> {
        match &q.unit {
            None => Some(q.number.value),
            Some(unit) => {
                let value = self.eval_unit(unit)?;
                if value.dimension != Dimension::time() {
                    self.diagnostics.push(
                        dimension_error(
                            unit.span(),
                            format!(
                                "{what} must be a time, but `{}` is {}",
                                sdeck_units::unit_expr_text(unit),
                                value.dimension.describe()
                            ),
                        )
                        .with_help(format!(
                            "write a time unit, e.g. `{} {}`",
                            q.number.text,
                            self.clock_unit()
                        )),
                    );
                    return None;
                }
                Some(q.number.value * value.scale)
            }
        }
    }

    pub(super) fn eval_unit(&mut self, unit: &ast::UnitExpr) -> Option<UnitValue> {
        let names: Vec<&str> = self.model.units.iter().map(|u| u.name.as_str()).collect();
        let declared = |n: &str| names.contains(&n);
        match eval_unit_with_names(unit, &declared, &names, self.model.clock.years) {
            Ok(v) => Some(v),
            Err(e) => {
                let rule = if e.undeclared {
                    &rules::UNKNOWN_NAME
                } else {
                    &rules::DIMENSION_MISMATCH
                };
                self.diagnostics.push(e.to_diagnostic(rule));
                None
            }
        }
    }

    pub(super) fn declared_unit(
        &mut self,
        unit: Option<&ast::UnitExpr>,
    ) -> (Dimension, f64, Option<String>) {
        match unit {
            None => (Dimension::dimensionless(), 1.0, None),
            Some(unit) => {
                let text = sdeck_units::unit_expr_text(unit);
                match self.eval_unit(unit) {
                    Some(v) => (v.dimension, v.scale, Some(text)),
                    None => (Dimension::dimensionless(), f64::NAN, Some(text)),
                }
            }
        }
    }

    /// The value of a `param` or `factor`: a number in its declared unit, or a constant
    /// expression of the parameters declared before it, resolved with its dimension and
    /// evaluated in clock units.
    pub(super) fn declared_value(
        &mut self,
        decl: &ast::Declaration,
        kind: &str,
        param_keyword: Option<Span>,
    ) -> DeclaredValue {
        match &decl.value {
            ast::DeclaredValue::Literal { number, unit } => {
                let (dimension, scale, unit_text) = self.declared_unit(unit.as_deref());
                DeclaredValue {
                    written: number.value,
                    value: number.value * scale,
                    scale,
                    known: scale.is_finite(),
                    dimension,
                    unit_text,
                    expr: None,
                }
            }
            ast::DeclaredValue::Expr(e) => {
                let what = if kind == "parameter" {
                    format!("the value of parameter `{}`", decl.name.name)
                } else {
                    format!("the initial value of factor `{}`", decl.name.name)
                };
                let (expr, dimension) = self.constant_expression(
                    e,
                    Constant {
                        what,
                        declaration: true,
                        param_keyword: param_keyword.filter(|_| decl.bound.is_none()),
                    },
                );
                let value = expr.eval(&self.model.param_values(), &[], 0.0);
                let known = dimension.is_some() && !expr.is_invalid();
                let dimension = dimension.unwrap_or_else(Dimension::dimensionless);
                let unit_text = (!dimension.is_dimensionless())
                    .then(|| dimension.display_in(self.clock_unit()));
                DeclaredValue {
                    written: value,
                    value,
                    scale: 1.0,
                    known,
                    dimension,
                    unit_text,
                    expr: Some(expr),
                }
            }
        }
    }

    /// Resolves a constant expression: only numbers and parameters (see [`Constant`]).
    pub(super) fn constant_expression(
        &mut self,
        e: &ast::Expr,
        constant: Constant,
    ) -> (Expr, Option<Dimension>) {
        let outer = self.constant.replace(constant);
        self.expanded = 0;
        let resolved = self.resolve(e);
        self.constant = outer;
        resolved
    }

    /// In a constant expression, a name that is not a parameter declared before it (or
    /// `pi`): the error that says what may be used. `None` when the name is allowed.
    pub(super) fn refuse_in_constant(
        &mut self,
        ident: &ast::Ident,
    ) -> Option<(Expr, Option<Dimension>)> {
        let constant = self.constant.clone()?;
        let name = ident.name.as_str();
        let allowed = if constant.declaration {
            "numbers and parameters declared before it"
        } else {
            "numbers and parameters"
        };
        let (message, help, fix) = match (
            name,
            self.names.get(name),
            self.declared_anywhere.get(name),
        ) {
            ("pi", ..) => return None,
            ("t", ..) => time_in_constant(&constant, allowed),
            (_, Some((Target::Param(i), _)), _) if i.index() < self.model.params.len() => return None,
            // The parameter being declared: its value cannot rest on itself.
            (_, Some((Target::Param(_), _)), _) => (
                format!("{} uses `{name}` itself", constant.what),
                format!(
                    "{} may use only {allowed}: write its value as a number or in terms of other parameters",
                    constant.what
                ),
                None,
            ),
            (_, Some((Target::Factor(_), _)), _) | (_, None, Some(&"factor")) => (
                format!(
                    "{} uses the factor `{name}`, whose value moves",
                    constant.what
                ),
                format!(
                    "{} may use only {allowed}; write a parameter for the level you mean",
                    constant.what
                ),
                None,
            ),
            (_, Some((Target::Let(_), _)), _) | (_, None, Some(&"let")) => (
                format!("{} uses the let `{name}`", constant.what),
                format!(
                    "{} may use only {allowed}; declare `{name}` as a `param` if it is a constant",
                    constant.what
                ),
                None,
            ),
            (_, None, Some(&"parameter")) => (
                format!(
                    "{} uses `{name}`, which is declared after it",
                    constant.what
                ),
                format!(
                    "{} may use only {allowed}: move `param {name}` above it",
                    constant.what
                ),
                None,
            ),
            _ => return None,
        };
        let mut d =
            Diagnostic::new(&rules::UNKNOWN_NAME, ident.span.clone(), message).with_help(help);
        if let Some((title, edits)) = fix {
            d = d.with_fix(title, edits);
        }
        self.diagnostics.push(d);
        if let Some((target, _)) = self.names.get(name).cloned() {
            self.reference(ident, &target);
            if let Target::Let(i) = target {
                self.let_used[i] = true;
            }
        }
        Some((Expr::Invalid, None))
    }

    /// Resolves an expression and infers its dimension. Errors are reported once, where
    /// they arise; `None` means the dimension is unknown because of an earlier error.
    pub(super) fn resolve(&mut self, e: &ast::Expr) -> (Expr, Option<Dimension>) {
        self.expanded += 1;
        match e {
            ast::Expr::Number(n) => (Expr::Const(n.value), Some(Dimension::dimensionless())),
            ast::Expr::Quantity(q) => match &q.unit {
                None => (
                    Expr::Const(q.number.value),
                    Some(Dimension::dimensionless()),
                ),
                Some(unit) => match self.eval_unit(unit) {
                    Some(v) => (Expr::Const(q.number.value * v.scale), Some(v.dimension)),
                    None => (Expr::Invalid, None),
                },
            },
            ast::Expr::Paren { inner, .. } => self.resolve(inner),
            ast::Expr::Name(ident) => self.resolve_name(ident),
            ast::Expr::Neg { operand, .. } => {
                let (x, d) = self.resolve(operand);
                (Expr::Neg(Box::new(x)), d)
            }
            ast::Expr::Binary { op, lhs, rhs, span } => {
                let (l, ld) = self.resolve(lhs);
                if *op == ast::BinaryOp::Pow {
                    return self.resolve_power(l, ld, rhs, span);
                }
                let (r, rd) = self.resolve(rhs);
                let dimension = match (op, ld, rd) {
                    (_, None, _) | (_, _, None) => None,
                    (ast::BinaryOp::Add | ast::BinaryOp::Sub, Some(a), Some(b)) => {
                        if a == b {
                            Some(a)
                        } else if let Some(d) =
                            self.bare_zero(lhs, &b).or_else(|| self.bare_zero(rhs, &a))
                        {
                            self.diagnostics.push(d);
                            None
                        } else {
                            let verb = if *op == ast::BinaryOp::Add {
                                "add"
                            } else {
                                "subtract"
                            };
                            self.diagnostics.push(
                                dimension_error(
                                    span.clone(),
                                    format!(
                                        "cannot {verb} {} and {}: the two sides of `{}` must have the same dimension",
                                        self.describe_operand(lhs, &a),
                                        self.describe_operand(rhs, &b),
                                        op.symbol()
                                    ),
                                )
                                .with_help("check the units of the parameters on each side"),
                            );
                            None
                        }
                    }
                    (ast::BinaryOp::Mul, Some(a), Some(b)) => Some(a.mul(&b)),
                    (_, Some(a), Some(b)) => Some(a.div(&b)),
                };
                let expr = match op {
                    ast::BinaryOp::Add => Expr::Add(Box::new(l), Box::new(r)),
                    ast::BinaryOp::Sub => Expr::Sub(Box::new(l), Box::new(r)),
                    ast::BinaryOp::Mul => Expr::Mul(Box::new(l), Box::new(r)),
                    _ => Expr::Div(Box::new(l), Box::new(r)),
                };
                (expr, dimension)
            }
            ast::Expr::Call {
                function,
                args,
                span,
            } => self.resolve_call(function, args, span),
        }
    }

    pub(super) fn describe_operand(&self, e: &ast::Expr, d: &Dimension) -> String {
        let text = self.source.get(e.span()).unwrap_or("").trim();
        if text.is_empty() || text.chars().count() > 40 {
            format!("a term in {}", d.describe())
        } else {
            format!("`{text}` ({})", d.describe())
        }
    }

    pub(super) fn resolve_power(
        &mut self,
        base: Expr,
        base_dim: Option<Dimension>,
        exponent: &ast::Expr,
        span: &Span,
    ) -> (Expr, Option<Dimension>) {
        let (exp, exp_dim) = self.resolve(exponent);
        let mut dimension = None;
        if let Some(ed) = exp_dim {
            if !ed.is_dimensionless() {
                self.diagnostics.push(
                    dimension_error(
                        exponent.span(),
                        format!(
                            "an exponent must be dimensionless, but this one is {}",
                            ed.describe()
                        ),
                    )
                    .with_help(
                        "divide by a parameter of the same unit to make the exponent a pure number",
                    ),
                );
            } else if let Some(bd) = base_dim {
                if bd.is_dimensionless() {
                    dimension = Some(bd);
                } else if contains_state_or_time(&exp) {
                    self.diagnostics.push(
                        dimension_error(
                            exponent.span(),
                            format!(
                                "the exponent of a quantity with a dimension ({}) must be constant",
                                bd.describe()
                            ),
                        )
                        .with_help("use a number or a dimensionless parameter as the exponent"),
                    );
                } else {
                    let value = exp.eval(&self.model.param_values(), &[], 0.0);
                    match rational_approx(value).and_then(|r| bd.pow(r)) {
                        Some(d) => dimension = Some(d),
                        None => self.diagnostics.push(
                            dimension_error(span.clone(), format!("cannot raise {} to the power {}", bd.describe(), number::plain(value)))
                                .with_help("a quantity with a dimension can be raised only to a simple fraction such as 2, 1/2 or 3/2"),
                        ),
                    }
                }
            }
        }
        (Expr::Pow(Box::new(base), Box::new(exp)), dimension)
    }

    pub(super) fn resolve_call(
        &mut self,
        function: &ast::Ident,
        args: &[ast::Expr],
        span: &Span,
    ) -> (Expr, Option<Dimension>) {
        let resolved: Vec<(Expr, Option<Dimension>)> =
            args.iter().map(|a| self.resolve(a)).collect();
        let Some(f) = Function::from_name(&function.name) else {
            if let Some(mended) = self.misread_call(function, span) {
                return mended;
            }
            self.diagnostics.push(
                Diagnostic::new(
                    &rules::UNKNOWN_NAME,
                    function.span.clone(),
                    format!("unknown function `{}`", function.name),
                )
                .with_help(
                    "the functions are exp, log, sqrt, abs, min, max, sin, cos, step and ramp",
                ),
            );
            return (Expr::Invalid, None);
        };
        if !f.accepts(args.len()) {
            self.diagnostics.push(arity_error(f, args.len(), span));
            return (Expr::Invalid, None);
        }
        let dims: Vec<Option<Dimension>> = resolved.iter().map(|(_, d)| d.clone()).collect();
        let exprs: Vec<Expr> = resolved.into_iter().map(|(e, _)| e).collect();
        let dimension = match f {
            Function::Exp | Function::Log | Function::Sin | Function::Cos => match &dims[0] {
                Some(d) if !d.is_dimensionless() => {
                    self.diagnostics.push(
                            dimension_error(args[0].span(), format!("`{}` needs a dimensionless argument, but this one is {}", f.name(), d.describe()))
                                .with_help(match f {
                                    Function::Sin | Function::Cos => "multiply a time by a frequency, e.g. `sin(2 * pi * freq * t)` with `param freq = 1 [1/year]`".to_string(),
                                    _ => "divide by a parameter of the same unit first, e.g. `log(S / S0)`".to_string(),
                                }),
                        );
                    None
                }
                Some(_) => Some(Dimension::dimensionless()),
                None => None,
            },
            Function::Sqrt => dims[0].as_ref().map(|d| d.sqrt()),
            Function::Abs => dims[0].clone(),
            Function::Step | Function::Ramp => self.schedule(f, args, &exprs, &dims),
            Function::Min | Function::Max => match (&dims[0], &dims[1]) {
                (Some(a), Some(b)) if a != b => {
                    if let Some(d) = self
                        .bare_zero(&args[0], b)
                        .or_else(|| self.bare_zero(&args[1], a))
                    {
                        self.diagnostics.push(d);
                        return (Expr::Call(f, exprs), None);
                    }
                    self.diagnostics.push(
                        dimension_error(
                            span.clone(),
                            format!(
                                "`{}` compares {} with {}: both must have the same dimension",
                                f.name(),
                                a.describe(),
                                b.describe()
                            ),
                        )
                        .with_help("check the units of both arguments"),
                    );
                    None
                }
                (Some(a), Some(_)) => Some(a.clone()),
                _ => None,
            },
        };
        (Expr::Call(f, exprs), dimension)
    }

    /// Two common slips that look like a call of an unknown function: a declared value
    /// followed by `(` (`kappa(theta - r)`, a product without its `*`) and `ln` for the
    /// natural logarithm. Reports the slip with a fix; for a product the name still counts
    /// as used, so it is not also reported as unused. `None` for any other unknown name.
    pub(super) fn misread_call(
        &mut self,
        function: &ast::Ident,
        span: &Span,
    ) -> Option<(Expr, Option<Dimension>)> {
        let name = function.name.as_str();
        let value = matches!(
            self.names.get(name),
            Some((Target::Param(_) | Target::Factor(_) | Target::Let(_), _))
        );
        if value {
            self.resolve_name(function);
            let rest = self.source.get(function.span.end..span.end).unwrap_or("");
            let gap = if rest.starts_with(char::is_whitespace) {
                ""
            } else {
                " "
            };
            let written = format!("{name} *{gap}{rest}");
            let message = if written.chars().count() <= 60 {
                format!("a name followed by `(`: did you mean `{written}`?")
            } else {
                format!("a name followed by `(`: did you mean `{name} * (...)`?")
            };
            self.diagnostics.push(
                Diagnostic::new(&rules::SYNTAX, function.span.clone(), message)
                    .with_help(format!(
                        "`{name}` is a declared value, not a function; products are written with `*`"
                    ))
                    .with_fix(
                        format!("Multiply: `{name} * (...)`"),
                        vec![TextEdit {
                            span: function.span.end..function.span.end,
                            new_text: format!(" *{gap}"),
                        }],
                    ),
            );
            return Some((Expr::Invalid, None));
        }
        if name == "ln" {
            self.diagnostics.push(
                Diagnostic::new(
                    &rules::UNKNOWN_NAME,
                    function.span.clone(),
                    "there is no function `ln`: the natural logarithm is `log`",
                )
                .with_help("write `log(...)`; the logarithm in any other base is `log(x) / log(b)`")
                .with_fix(
                    "Write `log` for `ln`",
                    vec![TextEdit {
                        span: function.span.clone(),
                        new_text: "log".to_string(),
                    }],
                ),
            );
            return Some((Expr::Invalid, None));
        }
        None
    }

    /// A bare `0` where a quantity in `other` is needed: the `dimension-mismatch` that
    /// says so, with a fix that writes the unit. `None` when `e` is not a bare zero.
    pub(super) fn bare_zero(&self, e: &ast::Expr, other: &Dimension) -> Option<Diagnostic> {
        if !is_zero_literal(e) || other.is_dimensionless() {
            return None;
        }
        let unit = other.display_in(self.clock_unit());
        let span = e.span();
        Some(
            dimension_error(
                span.clone(),
                format!(
                    "this `0` is a plain number, but it stands beside {}: a zero has the dimension it is written with",
                    other.describe()
                ),
            )
            .with_label(format!("write `0 [{unit}]`"))
            .with_help(format!("write the unit: `0 [{unit}]`"))
            .with_fix(
                format!("Write 0 [{unit}]"),
                vec![TextEdit {
                    span,
                    new_text: format!("0 [{unit}]"),
                }],
            ),
        )
    }
}

/// `FUNCTION takes N arguments, found M`, with how to write a call.
fn arity_error(f: Function, count: usize, span: &Span) -> Diagnostic {
    let (expected, help) = match f.arity() {
        Some(1) => ("1 argument".to_string(), format!("write `{}(x)`", f.name())),
        Some(n) => (
            format!("{n} arguments"),
            format!("write `{}(a, b)`", f.name()),
        ),
        None if f == Function::Step => (
            "a time, a first value and one or more knot-value pairs".to_string(),
            "write `step(t, v0, t1, v1, ...)`: v0 before the knot t1, v1 from it on".to_string(),
        ),
        None => (
            "a time and two or more knot-value pairs".to_string(),
            "write `ramp(t, t0, v0, t1, v1, ...)`: linear between the knots, flat outside"
                .to_string(),
        ),
    };
    Diagnostic::new(
        &rules::SYNTAX,
        span.clone(),
        format!("`{}` takes {expected}, found {} arguments", f.name(), count),
    )
    .with_help(help)
}

/// The message, help and fix for the time `t` in a constant expression: a parameter
/// whose value moves with time is a `let` (the fix, when no bound would be lost).
fn time_in_constant(
    constant: &Constant,
    allowed: &str,
) -> (String, String, Option<(String, Vec<TextEdit>)>) {
    let fix = constant.param_keyword.clone().map(|keyword| {
        (
            "Make it a `let`".to_string(),
            vec![TextEdit {
                span: keyword,
                new_text: "let".to_string(),
            }],
        )
    });
    let message = match constant.what.strip_prefix("the value of parameter ") {
            Some(param) => format!(
                "a parameter is a constant, but {param} uses the time `t`: use `let` for a value that moves with time"
            ),
            None => format!("{} uses the time `t`, but it is a constant", constant.what),
        };
    let help = match (&fix, constant.what.split('`').nth(1)) {
        (Some(_), Some(name)) => format!(
            "write `let {name} = ...` (a let has no bound); {} may use only {allowed}",
            constant.what
        ),
        _ => format!("{} may use only {allowed}", constant.what),
    };
    (message, help, fix)
}
