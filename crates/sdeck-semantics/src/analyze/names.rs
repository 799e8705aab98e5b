//! Stage 1, names: the settings (`model`, `clock`, `unit`, `horizon`), the declarations
//! of parameters, factors, shocks and lets, and every use of a name: what it refers to,
//! the references kept for the editor, what is used, and the diagnostics of names
//! (`unknown-name`, `duplicate-name`).

use super::*;

impl<'a> Analyzer<'a> {
    /// `model`, `clock`, `unit`: everything later statements depend on; then the
    /// horizon, converted to the clock.
    pub(super) fn settings(&mut self) {
        let file = self.file;
        let mut seen_model: Option<Span> = None;
        let mut seen_clock: Option<Span> = None;
        for statement in &file.statements {
            match &statement.kind {
                StatementKind::Model { name } => {
                    self.model_name(&statement.span, name, &mut seen_model)
                }
                StatementKind::Clock { unit } => self.clock(&statement.span, unit, &mut seen_clock),
                StatementKind::Unit { name } => self.unit_declaration(&statement.span, name),
                _ => {}
            }
        }
        for statement in &file.statements {
            if let StatementKind::Horizon { value } = &statement.kind {
                self.horizon(value);
            }
        }
    }

    /// `model NAME`: the first names the model, a second is `duplicate-name`.
    fn model_name(&mut self, statement: &Span, name: &ast::Ident, seen: &mut Option<Span>) {
        if let Some(first) = seen {
            self.diagnostics.push(
                Diagnostic::new(
                    &rules::DUPLICATE_NAME,
                    statement.clone(),
                    "the model is named twice",
                )
                .with_related(first.clone(), "first named here")
                .with_help("keep one `model` statement"),
            );
        } else {
            *seen = Some(statement.clone());
            self.model.name = name.name.clone();
        }
    }

    /// `clock UNIT`: the first sets the clock, a second is `duplicate-name`.
    fn clock(&mut self, statement: &Span, unit: &ast::Ident, seen: &mut Option<Span>) {
        if let Some(first) = seen {
            self.diagnostics.push(
                Diagnostic::new(
                    &rules::DUPLICATE_NAME,
                    statement.clone(),
                    "the clock is set twice",
                )
                .with_related(first.clone(), "first set here")
                .with_help("keep one `clock` statement"),
            );
            return;
        }
        *seen = Some(statement.clone());
        match time_unit_years(&unit.name) {
            Some(years) => {
                self.model.clock = Clock {
                    unit: unit.name.clone(),
                    years,
                }
            }
            None => self.diagnostics.push(
                dimension_error(
                    unit.span.clone(),
                    format!("the clock must run in a time unit, not `{}`", unit.name),
                )
                .with_help(
                    "write `clock year`, `clock month`, `clock week`, `clock day` or `clock bday`",
                ),
            ),
        }
    }

    /// `unit NAME`: a new unit, unless it is a time unit or already declared.
    fn unit_declaration(&mut self, statement: &Span, name: &ast::Ident) {
        if is_time_unit(&name.name) || name.name == sdeck_units::TIME_BASE {
            self.diagnostics.push(
                Diagnostic::new(
                    &rules::DUPLICATE_NAME,
                    name.span.clone(),
                    format!("`{}` is a built-in time unit and cannot be declared again", name.name),
                )
                .with_help("remove this line; the time units year, quarter, month, week, day, bday and hour always exist"),
            );
            return;
        }
        let index = self.model.units.len();
        if self.declare(
            &name.name,
            &name.span,
            Target::Unit(index),
            SymbolKind::Unit,
            statement,
        ) {
            self.model.units.push(UnitDecl {
                name: name.name.clone(),
                name_span: name.span.clone(),
            });
        }
    }

    /// `horizon TIME`, converted to the clock; it must be positive.
    fn horizon(&mut self, value: &ast::Quantity) {
        let Some(years) = self.time_quantity(value, "the horizon") else {
            return;
        };
        if years > 0.0 {
            self.model.horizon = years;
        } else {
            self.diagnostics.push(
                Diagnostic::new(
                    &rules::BOUND_VIOLATED,
                    value.span.clone(),
                    "the horizon must be positive",
                )
                .with_help("write a positive time, e.g. `horizon 1 year`"),
            );
        }
    }

    /// Registers a name; reports `duplicate-name` and returns false if it exists.
    pub(super) fn declare(
        &mut self,
        name: &str,
        span: &Span,
        target: Target,
        kind: SymbolKind,
        statement: &Span,
    ) -> bool {
        if let Some((_, first)) = self.names.get(name) {
            self.diagnostics.push(
                Diagnostic::new(&rules::DUPLICATE_NAME, span.clone(), format!("`{name}` is declared twice"))
                    .with_label("declared again here")
                    .with_related(first.clone(), format!("`{name}` first declared here"))
                    .with_help("names are unique across units, parameters, factors, shocks and lets; rename one of them"),
            );
            return false;
        }
        self.names.insert(name.to_string(), (target, span.clone()));
        self.symbols.push(Symbol {
            name: name.to_string(),
            kind,
            name_span: span.clone(),
            statement_span: statement.clone(),
        });
        true
    }

    /// Every `param`, `factor`, `shock` and `let`, in file order: first which names the
    /// file declares anywhere (to tell a name declared later from one never declared),
    /// then each declaration.
    pub(super) fn declarations(&mut self) {
        let file = self.file;
        let mut declared_names = 0;
        for statement in &file.statements {
            let declared: Vec<(&str, &'static str)> = match &statement.kind {
                StatementKind::Param(d) => vec![(d.name.name.as_str(), "parameter")],
                StatementKind::Factor(d) => vec![(d.name.name.as_str(), "factor")],
                StatementKind::Let { name, .. } => vec![(name.name.as_str(), "let")],
                StatementKind::Shock { names } => {
                    names.iter().map(|n| (n.name.as_str(), "shock")).collect()
                }
                StatementKind::Unit { name } => vec![(name.name.as_str(), "unit")],
                _ => Vec::new(),
            };
            declared_names += declared.len();
            for (name, kind) in declared {
                self.declared_anywhere
                    .entry(name.to_string())
                    .or_insert(kind);
            }
        }
        // Exact room for the parameters and what is kept per parameter: a file can hold
        // 200,000 of them, and growth by doubling would hold up to twice that.
        let params = file
            .statements
            .iter()
            .filter(|s| matches!(s.kind, StatementKind::Param(_)))
            .count();
        self.symbols.reserve_exact(declared_names);
        self.model.params.reserve_exact(params);
        self.param_units.reserve_exact(params);
        self.param_used.reserve_exact(params);
        self.param_unit_ok.reserve_exact(params);
        self.structure.param_statements.reserve_exact(params);
        for (statement_index, statement) in file.statements.iter().enumerate() {
            match &statement.kind {
                StatementKind::Param(decl) => self.declare_param(statement_index, statement, decl),
                StatementKind::Factor(decl) => {
                    self.declare_factor(statement_index, statement, decl)
                }
                StatementKind::Shock { names } => self.declare_shocks(statement, names),
                StatementKind::Let { name, value } => self.declare_let(statement, name, value),
                _ => {}
            }
        }
    }

    /// `param NAME = VALUE [UNIT] BOUND`: declared, its value resolved with the
    /// parameters declared before it and converted to the clock.
    fn declare_param(
        &mut self,
        statement_index: usize,
        statement: &ast::Statement,
        decl: &ast::Declaration,
    ) {
        let index = ParamId::new(self.model.params.len());
        if !self.declare(
            &decl.name.name,
            &decl.name.span,
            Target::Param(index),
            SymbolKind::Param,
            &statement.span,
        ) {
            return;
        }
        let keyword = statement.span.start..statement.span.start + "param".len();
        let value = self.declared_value(decl, "parameter", Some(keyword));
        let bound = decl
            .bound
            .as_ref()
            .map(|b| Box::new(convert_bound(b, value.scale)));
        self.param_units.push(
            decl.unit()
                .map(|u| (u.span(), sdeck_units::unit_expr_text(u))),
        );
        self.model.params.push(Param {
            name: decl.name.name.clone(),
            name_span: decl.name.span.clone(),
            span: statement.span.clone(),
            written: value.written,
            value: value.value,
            scale: value.scale,
            dimension: value.dimension,
            unit_text: value.unit_text,
            bound,
            description: statement.description.clone(),
            expr: value.expr.map(Box::new),
        });
        self.param_used.push(false);
        self.param_unit_ok.push(value.known);
        self.structure.param_statements.push(statement_index);
    }

    /// `factor NAME = VALUE [UNIT] DOMAIN`: declared, its initial value converted.
    fn declare_factor(
        &mut self,
        statement_index: usize,
        statement: &ast::Statement,
        decl: &ast::Declaration,
    ) {
        let index = FactorId::new(self.model.factors.len());
        if !self.declare(
            &decl.name.name,
            &decl.name.span,
            Target::Factor(index),
            SymbolKind::Factor,
            &statement.span,
        ) {
            return;
        }
        let value = self.declared_value(decl, "factor", None);
        let bound = decl.bound.as_ref().map(|b| convert_bound(b, value.scale));
        self.model.factors.push(Factor {
            name: decl.name.name.clone(),
            name_span: decl.name.span.clone(),
            span: statement.span.clone(),
            written: value.written,
            initial: value.value,
            scale: value.scale,
            dimension: value.dimension,
            unit_text: value.unit_text,
            domain: bound.unwrap_or_default(),
            has_domain: bound.is_some(),
            description: statement.description.clone(),
            equation: None,
            initial_expr: value.expr,
        });
        self.state_unit_ok.push(value.known);
        self.structure.factor_statements.push(statement_index);
    }

    /// `shock A, B, ...`: each name declared.
    fn declare_shocks(&mut self, statement: &ast::Statement, names: &[ast::Ident]) {
        for name in names {
            let index = ShockId::new(self.model.shocks.len());
            if self.declare(
                &name.name,
                &name.span,
                Target::Shock(index),
                SymbolKind::Shock,
                &statement.span,
            ) {
                self.model.shocks.push(Shock {
                    name: name.name.clone(),
                    name_span: name.span.clone(),
                    description: statement.description.clone(),
                });
                self.noise_used.push(false);
            }
        }
    }

    /// `let NAME = EXPR`: declared now, resolved once every name is known.
    fn declare_let(&mut self, statement: &ast::Statement, name: &ast::Ident, value: &'a ast::Expr) {
        let index = LetId::new(self.model.lets.len());
        if self.declare(
            &name.name,
            &name.span,
            Target::Let(index),
            SymbolKind::Let,
            &statement.span,
        ) {
            self.model.lets.push(Let {
                name: name.name.clone(),
                name_span: name.span.clone(),
                span: statement.span.clone(),
                value: Expr::Invalid,
                dimension: None,
                description: statement.description.clone(),
            });
            self.let_asts.push(value);
            self.let_sizes.push(0);
            self.let_progress.push(LetProgress::Pending);
            self.let_used.push(false);
        }
    }

    pub(super) fn resolve_name(&mut self, ident: &ast::Ident) -> (Expr, Option<Dimension>) {
        if let Some(refused) = self.refuse_in_constant(ident) {
            return refused;
        }
        match ident.name.as_str() {
            "t" => return (Expr::Time, Some(Dimension::time())),
            "pi" => {
                return (
                    Expr::Const(std::f64::consts::PI),
                    Some(Dimension::dimensionless()),
                )
            }
            _ => {}
        }
        let Some((target, _)) = self.names.get(&ident.name).cloned() else {
            self.undefined(ident);
            return (Expr::Invalid, None);
        };
        self.reference(ident, &target);
        match target {
            Target::Param(i) => {
                self.param_used[i] = true;
                let dimension =
                    self.param_unit_ok[i].then(|| self.model.params[i].dimension.clone());
                (Expr::Param(i), dimension)
            }
            Target::Factor(i) => {
                let dimension =
                    self.state_unit_ok[i].then(|| self.model.factors[i].dimension.clone());
                (Expr::Factor(i), dimension)
            }
            Target::Let(i) => {
                self.let_used[i] = true;
                self.resolve_let(i);
                let size = self.let_sizes[i];
                if self.expanded + size > MAX_EXPANDED_NODES {
                    let l = &self.model.lets[i];
                    let dimension = l.dimension.clone();
                    self.diagnostics.push(
                        Diagnostic::new(
                            &rules::SYNTAX,
                            ident.span.clone(),
                            format!(
                                "with `{}` written out, this expression holds more than {MAX_EXPANDED_NODES} terms",
                                ident.name
                            ),
                        )
                        .with_help("lets are written out where they are used; a let that uses another let twice doubles in size at every level"),
                    );
                    return (Expr::Invalid, dimension);
                }
                self.expanded += size;
                let l = &self.model.lets[i];
                (l.value.clone(), l.dimension.clone())
            }
            Target::Shock(_) => {
                self.diagnostics.push(
                    Diagnostic::new(
                        &rules::UNKNOWN_NAME,
                        ident.span.clone(),
                        format!("`{}` is a shock and cannot be used as a value", ident.name),
                    )
                    .with_help(format!(
                        "a shock appears only as the differential that ends a term: `vol d{}`",
                        ident.name
                    )),
                );
                (Expr::Invalid, None)
            }
            Target::Unit(_) => {
                self.diagnostics.push(
                    Diagnostic::new(&rules::UNKNOWN_NAME, ident.span.clone(), format!("`{}` is a unit and cannot be used as a value", ident.name))
                        .with_help("units are written in brackets after a declaration's value: `param p = 100 [EUR]`"),
                );
                (Expr::Invalid, None)
            }
        }
    }

    pub(super) fn reference(&mut self, ident: &ast::Ident, target: &Target) {
        // A name may be used while its own declaration is being resolved (`param k = k`),
        // before it is in the model: no reference is recorded then.
        let name_span = match *target {
            Target::Param(i) => self.model.params.by_id(i).map(|p| p.name_span.clone()),
            Target::Factor(i) => self.model.factors.by_id(i).map(|f| f.name_span.clone()),
            Target::Shock(i) => self.model.shocks.by_id(i).map(|n| n.name_span.clone()),
            Target::Let(i) => self.model.lets.by_id(i).map(|l| l.name_span.clone()),
            Target::Unit(i) => self.model.units.get(i).map(|u| u.name_span.clone()),
        };
        let Some(name_span) = name_span else {
            return;
        };
        self.references.push(Reference {
            span: ident.span.clone(),
            name: ident.name.clone(),
            declaration: name_span,
        });
    }

    /// `WHAT NAME is not declared`, with the closest declared name as help.
    fn not_declared(&self, ident: &ast::Ident, what: &str) -> Diagnostic {
        let d = Diagnostic::new(
            &rules::UNKNOWN_NAME,
            ident.span.clone(),
            format!("{what}`{}` is not declared", ident.name),
        );
        if let Some(close) = closest_name(&ident.name, self.names.keys()) {
            d.with_help(format!("did you mean `{close}`?"))
        } else {
            d.with_help(format!("declare it, e.g. `param {} = 1`", ident.name))
        }
    }

    /// A value's name that is not declared, with a stub parameter to choose as a fix.
    pub(super) fn undefined(&mut self, ident: &ast::Ident) {
        let mut d = self.not_declared(ident, "");
        let insert_at = self
            .model
            .params
            .last()
            .map(|p| line_end_after(self.source, p.span.end))
            .unwrap_or(0);
        d = d.with_manual_fix(
            format!("Declare `param {}`", ident.name),
            vec![TextEdit {
                span: insert_at..insert_at,
                new_text: format!("param {} = 0  # TODO: value and unit\n", ident.name),
            }],
        );
        self.diagnostics.push(d);
    }

    /// `ident` names something other than the `kind` the place needs.
    fn wrong_kind(&mut self, ident: &ast::Ident, kind: &str, help: &'static str) {
        self.diagnostics.push(
            Diagnostic::new(
                &rules::UNKNOWN_NAME,
                ident.span.clone(),
                format!("`{}` is not a {kind}", ident.name),
            )
            .with_help(help),
        );
    }

    pub(super) fn noise_named(&mut self, ident: &ast::Ident) -> Option<ShockId> {
        match self.names.get(&ident.name).cloned() {
            Some((Target::Shock(i), _)) => {
                self.reference(ident, &Target::Shock(i));
                Some(i)
            }
            Some(_) => {
                self.wrong_kind(
                    ident,
                    "shock",
                    "`corr` relates two shocks declared with `shock`",
                );
                None
            }
            None => {
                let mut d = Diagnostic::new(
                    &rules::UNKNOWN_NAME,
                    ident.span.clone(),
                    format!("shock `{}` is not declared", ident.name),
                );
                d = match closest_name(&ident.name, self.model.shocks.iter().map(|n| &n.name)) {
                    Some(close) => d.with_help(format!("did you mean `{close}`?")),
                    None => d.with_help(format!("declare it with `shock {}`", ident.name)),
                };
                self.diagnostics.push(d);
                None
            }
        }
    }

    /// The factor an expectation names, or a diagnostic.
    pub(super) fn expected_factor(&mut self, ident: &ast::Ident) -> Option<FactorId> {
        match self.names.get(&ident.name).cloned() {
            Some((Target::Factor(i), _)) => {
                self.reference(ident, &Target::Factor(i));
                Some(i)
            }
            Some(_) => {
                self.wrong_kind(ident, "factor", "expectations pin figures of a factor");
                None
            }
            None => {
                // Only a factor mends it: the fix writes a factor of a similar name.
                let mut d = self.not_declared(ident, "factor ");
                let factors = self.model.factors.iter().map(|f| &f.name);
                if let Some(close) = closest_name(&ident.name, factors) {
                    d = d.with_fix(
                        format!("Write `{close}`"),
                        vec![TextEdit {
                            span: ident.span.clone(),
                            new_text: close,
                        }],
                    );
                }
                self.diagnostics.push(d);
                None
            }
        }
    }
}

/// The names that statements which did not parse set out to declare: the word after
/// `param`, `factor`, `let` or `unit`, and every name after `shock` (`shock W, B`).
pub(super) fn declared_in_unparsed<'s>(
    file: &ast::SourceFile,
    source: &'s str,
) -> std::collections::HashSet<&'s str> {
    let mut names = std::collections::HashSet::new();
    for span in &file.unparsed {
        let Some(text) = source.get(span.clone()) else {
            continue;
        };
        let text = text.trim_start();
        let keyword_end = text
            .find(|c: char| !c.is_alphabetic())
            .unwrap_or(text.len());
        let (keyword, mut rest) = text.split_at(keyword_end);
        let several = match keyword {
            "param" | "factor" | "let" | "unit" => false,
            "shock" => true,
            _ => continue,
        };
        loop {
            rest = rest.trim_start_matches([' ', '\t']);
            let end = rest
                .find(|c: char| !(c.is_alphabetic() || c.is_ascii_digit() || c == '_'))
                .unwrap_or(rest.len());
            if end == 0 {
                break;
            }
            names.insert(&rest[..end]);
            rest = rest[end..].trim_start_matches([' ', '\t']);
            match rest.strip_prefix(',') {
                Some(after) if several => rest = after,
                _ => break,
            }
        }
    }
    names
}

/// Whether `text`, the place of an `unknown-name` finding, is one of `names`, or the
/// differential `dX` of one.
pub(super) fn names_one_of(text: &str, names: &std::collections::HashSet<&str>) -> bool {
    names.contains(text) || text.strip_prefix('d').is_some_and(|n| names.contains(n))
}
