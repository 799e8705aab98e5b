//! From the syntax tree to the semantic model: names, units, values in clock units, and
//! the diagnostics that arise while names are resolved and units inferred (syntax,
//! unknown-name, duplicate-name, dimension-mismatch, and the bound-violated and
//! missing-equation cases that stop a value or an equation from entering the model).
//! What the structural rules of sdeck-checks read beside the model is kept in
//! [`Structure`].

use crate::model::*;
use crate::structure::{Differential, RepeatedTerm, Structure, WrittenCorrelation};
use crate::symbols::{Reference, Symbol, SymbolKind};
use sdeck_diagnostics::{rules, Diagnostic, Span, TextEdit};
use sdeck_syntax::ast::{self, Figure, StatementKind};
use sdeck_units::{
    eval_unit_with_names, is_time_unit, suggest_unit_text, time_unit_years, Dimension, Rational,
    UnitValue,
};
use std::collections::HashMap;

/// The result of analysing one file: the tree, the model and every diagnostic so far.
#[derive(Clone, Debug)]
pub struct Analysis {
    pub file: ast::SourceFile,
    pub model: Model,
    /// Syntax and semantic diagnostics, in the order found.
    pub diagnostics: Vec<Diagnostic>,
    /// Every declared name.
    pub symbols: Vec<Symbol>,
    /// Every use of a declared name (declarations themselves are not included).
    pub references: Vec<Reference>,
    /// Which parameters, shocks and lets something uses (the rule `unused` reads it).
    pub usage: Usage,
    /// What the structural rules of sdeck-checks read beside the model.
    pub structure: Structure,
}

/// Which declared names something uses, by index in the model's lists.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Usage {
    pub params: Vec<bool>,
    pub shocks: Vec<bool>,
    pub lets: Vec<bool>,
}

impl Analysis {
    /// Whether the model may be incomplete: a diagnostic so far is an error, or the
    /// records of [`Analysis::structure`] hold what a structural rule reports as an
    /// error (a value outside its bound, a correlation set aside, a term left out, a
    /// factor without an equation).
    pub fn has_errors(&self) -> bool {
        let model = &self.model;
        self.diagnostics
            .iter()
            .any(|d| d.severity == sdeck_diagnostics::Severity::Error)
            || model.params.iter().any(Param::breaks_bound)
            || model.factors.iter().any(Factor::breaks_domain)
            || self
                .structure
                .correlations
                .iter()
                .any(|c| c.is_self() || c.is_out_of_range())
            || !self.structure.repeated_terms.is_empty()
            || (0..model.factors.len()).any(|i| self.lacks_equation(i))
    }

    /// The declaration of the parameter `index` of the model.
    pub fn param_declaration(&self, index: usize) -> Option<&ast::Declaration> {
        let statement = self
            .file
            .statements
            .get(*self.structure.param_statements.get(index)?)?;
        match &statement.kind {
            StatementKind::Param(decl) => Some(decl),
            _ => None,
        }
    }

    /// The declaration of the factor `index` of the model.
    pub fn factor_declaration(&self, index: usize) -> Option<&ast::Declaration> {
        let statement = self
            .file
            .statements
            .get(*self.structure.factor_statements.get(index)?)?;
        match &statement.kind {
            StatementKind::Factor(decl) => Some(decl),
            _ => None,
        }
    }

    /// Whether the factor `index` has no equation, and none hides in text that did not
    /// parse.
    pub fn lacks_equation(&self, index: usize) -> bool {
        self.model
            .factors
            .get(index)
            .is_some_and(|f| f.equation.is_none())
            && !self
                .structure
                .equation_unparsed
                .get(index)
                .copied()
                .unwrap_or(false)
    }
}

/// Parses and analyses `source`. `default_name` names the model when it has no `model`
/// statement (the file's stem).
///
/// ```
/// let analysis = sdeck_semantics::analyze(
///     "param kappa = 2 [1/year] > 0\nparam vol = 1% [1/sqrt(day)]\nshock W\nfactor x = 0\ndx = -kappa * x dt + vol dW\n",
///     "demo",
/// );
/// let vol = &analysis.model.params[1];
/// assert_eq!(vol.value, 0.01 * 365f64.sqrt());
/// assert!(!analysis.has_errors());
/// ```
pub fn analyze(source: &str, default_name: &str) -> Analysis {
    let file = sdeck_syntax::parse(source);
    let mut analyzer = Analyzer::new(&file, source, default_name);
    analyzer.run();
    let Analyzer {
        model,
        mut diagnostics,
        symbols,
        references,
        param_used,
        noise_used,
        let_used,
        structure,
        ..
    } = analyzer;
    let mut all = file.diagnostics.clone();
    all.append(&mut diagnostics);
    Analysis {
        file,
        model,
        diagnostics: all,
        symbols,
        references,
        usage: Usage {
            params: param_used,
            shocks: noise_used,
            lets: let_used,
        },
        structure,
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Target {
    Unit(usize),
    Param(usize),
    Factor(usize),
    Shock(usize),
    Let(usize),
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum LetProgress {
    Pending,
    Busy,
    Done,
}

struct Analyzer<'a> {
    file: &'a ast::SourceFile,
    source: &'a str,
    model: Model,
    diagnostics: Vec<Diagnostic>,
    symbols: Vec<Symbol>,
    references: Vec<Reference>,
    names: HashMap<String, (Target, Span)>,
    let_asts: Vec<&'a ast::Expr>,
    let_progress: Vec<LetProgress>,
    param_used: Vec<bool>,
    /// Whether a param's (or state's) unit evaluated; when not, its dimension is unknown
    /// and no dimension error is reported downstream of it.
    param_unit_ok: Vec<bool>,
    state_unit_ok: Vec<bool>,
    noise_used: Vec<bool>,
    let_used: Vec<bool>,
    /// Nodes in the expression being resolved, each let counted at its inlined size.
    expanded: usize,
    /// Inlined size of each resolved let.
    let_sizes: Vec<usize>,
    /// Unit spans of param/state declarations, for fixes.
    param_units: Vec<Option<(Span, String)>>,
    /// Set while a declared value or a correlation is resolved: it may use only numbers
    /// and parameters (declared before it, for a declaration).
    constant: Option<Constant>,
    /// Every name declared anywhere in the file and what it is (`parameter`, `factor`,
    /// ...), to tell a name declared later from one never declared.
    declared_anywhere: HashMap<String, &'static str>,
    /// What the structural rules read beside the model.
    structure: Structure,
}

/// A declared value resolved: see [`Analyzer::declared_value`].
struct DeclaredValue {
    /// In the declared unit (clock units for an expression).
    written: f64,
    /// In clock units.
    value: f64,
    scale: f64,
    /// Whether the unit and dimension are known (no error in them).
    known: bool,
    dimension: Dimension,
    unit_text: Option<String>,
    expr: Option<Expr>,
}

/// What a constant expression being resolved belongs to.
#[derive(Clone)]
struct Constant {
    /// "the value of parameter `stress`", "the correlation of `W` and `B`".
    what: String,
    /// Whether it is a declaration (parameters declared after it are then refused).
    declaration: bool,
    /// For a `param` whose value uses `t`: the span of the keyword `param`, for the fix
    /// that makes it a `let` (`None` when a bound would be lost).
    param_keyword: Option<Span>,
}

fn dimension_error(span: Span, message: impl Into<String>) -> Diagnostic {
    Diagnostic::new(&rules::DIMENSION_MISMATCH, span, message)
}

/// The most nodes a resolved expression may hold once its lets are written out: lets
/// are inlined, and without a limit `let b = a * a`, `let c = b * b`, … doubles at every
/// level.
pub const MAX_EXPANDED_NODES: usize = 3000;

/// Formats a number for messages: up to 6 significant digits, no trailing zeros (the
/// one formatter, [`sdeck_units::number::plain`]).
pub fn fmt_num(x: f64) -> String {
    sdeck_units::number::plain(x)
}

impl<'a> Analyzer<'a> {
    fn new(file: &'a ast::SourceFile, source: &'a str, default_name: &str) -> Self {
        Analyzer {
            file,
            source,
            model: Model {
                name: default_name.to_string(),
                clock: Clock {
                    unit: "year".to_string(),
                    years: 1.0,
                },
                horizon: 1.0,
                units: Vec::new(),
                params: Vec::new(),
                factors: Vec::new(),
                shocks: Vec::new(),
                correlations: Vec::new(),
                lets: Vec::new(),
                expectations: Vec::new(),
                measure: None,
                discount: None,
            },
            diagnostics: Vec::new(),
            symbols: Vec::new(),
            references: Vec::new(),
            names: HashMap::new(),
            let_asts: Vec::new(),
            let_progress: Vec::new(),
            param_used: Vec::new(),
            param_unit_ok: Vec::new(),
            state_unit_ok: Vec::new(),
            noise_used: Vec::new(),
            let_used: Vec::new(),
            param_units: Vec::new(),
            expanded: 0,
            let_sizes: Vec::new(),
            constant: None,
            declared_anywhere: HashMap::new(),
            structure: Structure::default(),
        }
    }

    fn run(&mut self) {
        self.settings();
        self.declarations();
        self.resolve_lets();
        self.correlations();
        self.equations();
        self.short_rate();
        self.expectations();
    }

    fn clock_unit(&self) -> &str {
        &self.model.clock.unit
    }

    /// `model`, `clock`, `unit`: everything later statements depend on.
    fn settings(&mut self) {
        let mut seen_model: Option<Span> = None;
        let mut seen_clock: Option<Span> = None;
        for statement in &self.file.statements {
            match &statement.kind {
                StatementKind::Model { name } => {
                    if let Some(first) = &seen_model {
                        self.diagnostics.push(
                            Diagnostic::new(
                                &rules::DUPLICATE_NAME,
                                statement.span.clone(),
                                "the model is named twice",
                            )
                            .with_related(first.clone(), "first named here")
                            .with_help("keep one `model` statement"),
                        );
                    } else {
                        seen_model = Some(statement.span.clone());
                        self.model.name = name.name.clone();
                    }
                }
                StatementKind::Clock { unit } => {
                    if let Some(first) = &seen_clock {
                        self.diagnostics.push(
                            Diagnostic::new(
                                &rules::DUPLICATE_NAME,
                                statement.span.clone(),
                                "the clock is set twice",
                            )
                            .with_related(first.clone(), "first set here")
                            .with_help("keep one `clock` statement"),
                        );
                        continue;
                    }
                    seen_clock = Some(statement.span.clone());
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
                            .with_help("write `clock year`, `clock month`, `clock week`, `clock day` or `clock bday`"),
                        ),
                    }
                }
                StatementKind::Unit { name } => {
                    if is_time_unit(&name.name) || name.name == sdeck_units::TIME_BASE {
                        self.diagnostics.push(
                            Diagnostic::new(
                                &rules::DUPLICATE_NAME,
                                name.span.clone(),
                                format!("`{}` is a built-in time unit and cannot be declared again", name.name),
                            )
                            .with_help("remove this line; the time units year, quarter, month, week, day, bday and hour always exist"),
                        );
                        continue;
                    }
                    let index = self.model.units.len();
                    if self.declare(
                        &name.name,
                        &name.span,
                        Target::Unit(index),
                        SymbolKind::Unit,
                        &statement.span,
                    ) {
                        self.model.units.push(UnitDecl {
                            name: name.name.clone(),
                            name_span: name.span.clone(),
                        });
                    }
                }
                _ => {}
            }
        }
        for statement in &self.file.statements {
            if let StatementKind::Horizon { value } = &statement.kind {
                if let Some(years) = self.time_quantity(value, "the horizon") {
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
            }
        }
    }

    /// A quantity that must be a time, converted to clock units. A number with no unit is
    /// taken in clock units.
    fn time_quantity(&mut self, q: &ast::Quantity, what: &str) -> Option<f64> {
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

    fn eval_unit(&mut self, unit: &ast::UnitExpr) -> Option<UnitValue> {
        let names: Vec<&str> = self.model.units.iter().map(|u| u.name.as_str()).collect();
        let declared = |n: &str| names.contains(&n);
        match eval_unit_with_names(unit, &declared, &names, self.model.clock.years) {
            Ok(v) => Some(v),
            Err(e) => {
                let rule = if e.message.contains("not declared") || e.message.contains("unknown") {
                    &rules::UNKNOWN_NAME
                } else {
                    &rules::DIMENSION_MISMATCH
                };
                self.diagnostics.push(e.to_diagnostic(rule));
                None
            }
        }
    }

    /// Registers a name; reports `duplicate-name` and returns false if it exists.
    fn declare(
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

    fn declarations(&mut self) {
        let file = self.file;
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
            for (name, kind) in declared {
                self.declared_anywhere
                    .entry(name.to_string())
                    .or_insert(kind);
            }
        }
        for (statement_index, statement) in file.statements.iter().enumerate() {
            match &statement.kind {
                StatementKind::Param(decl) => {
                    let index = self.model.params.len();
                    if !self.declare(
                        &decl.name.name,
                        &decl.name.span,
                        Target::Param(index),
                        SymbolKind::Param,
                        &statement.span,
                    ) {
                        continue;
                    }
                    let keyword = statement.span.start..statement.span.start + "param".len();
                    let value = self.declared_value(decl, "parameter", Some(keyword));
                    let bound = decl.bound.as_ref().map(|b| convert_bound(b, value.scale));
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
                        expr: value.expr,
                    });
                    self.param_used.push(false);
                    self.param_unit_ok.push(value.known);
                    self.structure.param_statements.push(statement_index);
                }
                StatementKind::Factor(decl) => {
                    let index = self.model.factors.len();
                    if !self.declare(
                        &decl.name.name,
                        &decl.name.span,
                        Target::Factor(index),
                        SymbolKind::Factor,
                        &statement.span,
                    ) {
                        continue;
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
                StatementKind::Shock { names } => {
                    for name in names {
                        let index = self.model.shocks.len();
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
                StatementKind::Let { name, value } => {
                    let index = self.model.lets.len();
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
                _ => {}
            }
        }
    }

    fn declared_unit(&mut self, unit: Option<&ast::UnitExpr>) -> (Dimension, f64, Option<String>) {
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
    fn declared_value(
        &mut self,
        decl: &ast::Declaration,
        kind: &str,
        param_keyword: Option<Span>,
    ) -> DeclaredValue {
        match &decl.value {
            ast::DeclaredValue::Literal { number, unit } => {
                let (dimension, scale, unit_text) = self.declared_unit(unit.as_ref());
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
    fn constant_expression(
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
    fn refuse_in_constant(&mut self, ident: &ast::Ident) -> Option<(Expr, Option<Dimension>)> {
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
            ("t", ..) => {
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
            (_, Some((Target::Param(i), _)), _) if *i < self.model.params.len() => return None,
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

    fn resolve_lets(&mut self) {
        for i in 0..self.model.lets.len() {
            self.resolve_let(i);
        }
    }

    fn resolve_let(&mut self, index: usize) {
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

    /// Resolves an expression and infers its dimension. Errors are reported once, where
    /// they arise; `None` means the dimension is unknown because of an earlier error.
    fn resolve(&mut self, e: &ast::Expr) -> (Expr, Option<Dimension>) {
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

    fn describe_operand(&self, e: &ast::Expr, d: &Dimension) -> String {
        let text = self.source.get(e.span()).unwrap_or("").trim();
        if text.is_empty() || text.chars().count() > 40 {
            format!("a term in {}", d.describe())
        } else {
            format!("`{text}` ({})", d.describe())
        }
    }

    fn resolve_power(
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
                            dimension_error(span.clone(), format!("cannot raise {} to the power {}", bd.describe(), fmt_num(value)))
                                .with_help("a quantity with a dimension can be raised only to a simple fraction such as 2, 1/2 or 3/2"),
                        ),
                    }
                }
            }
        }
        (Expr::Pow(Box::new(base), Box::new(exp)), dimension)
    }

    fn resolve_call(
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
            let (expected, help) = match f.arity() {
                Some(1) => ("1 argument".to_string(), format!("write `{}(x)`", f.name())),
                Some(n) => (
                    format!("{n} arguments"),
                    format!("write `{}(a, b)`", f.name()),
                ),
                None if f == Function::Step => (
                    "a time, a first value and one or more knot-value pairs".to_string(),
                    "write `step(t, v0, t1, v1, ...)`: v0 before the knot t1, v1 from it on"
                        .to_string(),
                ),
                None => (
                    "a time and two or more knot-value pairs".to_string(),
                    "write `ramp(t, t0, v0, t1, v1, ...)`: linear between the knots, flat outside"
                        .to_string(),
                ),
            };
            self.diagnostics.push(
                Diagnostic::new(
                    &rules::SYNTAX,
                    span.clone(),
                    format!(
                        "`{}` takes {expected}, found {} arguments",
                        f.name(),
                        args.len()
                    ),
                )
                .with_help(help),
            );
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

    /// A bare `0` where a quantity in `other` is needed: the `dimension-mismatch` that
    /// says so, with a fix that writes the unit. `None` when `e` is not a bare zero.
    fn bare_zero(&self, e: &ast::Expr, other: &Dimension) -> Option<Diagnostic> {
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

    /// Checks the arguments of `step` and `ramp`: the first is a time, the knots are
    /// constant times in strictly increasing order, the values share one dimension.
    /// Returns the dimension of the values.
    fn schedule(
        &mut self,
        f: Function,
        args: &[ast::Expr],
        exprs: &[Expr],
        dims: &[Option<Dimension>],
    ) -> Option<Dimension> {
        let name = f.name();
        let mut sound = true;
        if let Some(Some(d)) = dims.first() {
            if *d != Dimension::time() {
                self.diagnostics.push(
                    dimension_error(
                        args[0].span(),
                        format!(
                            "the first argument of `{name}` is the time it follows, but this one is {}",
                            d.describe()
                        ),
                    )
                    .with_help(format!("write `{name}(t, ...)`")),
                );
                sound = false;
            }
        }
        let params = self.model.param_values();
        let clock = self.clock_unit().to_string();
        let mut previous: Option<f64> = None;
        for (count, k) in f.knot_positions(args.len()).enumerate() {
            let (Some(arg), Some(expr)) = (args.get(k), exprs.get(k)) else {
                continue;
            };
            match dims.get(k) {
                Some(Some(d)) if *d != Dimension::time() => {
                    let mut diagnostic = dimension_error(
                        arg.span(),
                        format!(
                            "a knot of `{name}` is a time, but this one is {}",
                            d.describe()
                        ),
                    )
                    .with_help(format!(
                        "write the knot with a time unit, e.g. `6 [month]` or `1 [{clock}]`"
                    ));
                    if let ast::Expr::Number(n) = arg {
                        let new_text = format!("{} [{clock}]", n.text);
                        diagnostic = diagnostic.with_fix(
                            format!("Write {new_text}"),
                            vec![TextEdit {
                                span: n.span.clone(),
                                new_text,
                            }],
                        );
                    }
                    self.diagnostics.push(diagnostic);
                    sound = false;
                    continue;
                }
                Some(Some(_)) => {}
                _ => {
                    sound = false;
                    continue;
                }
            }
            if contains_state_or_time(expr) {
                self.diagnostics.push(
                    Diagnostic::new(
                        &rules::BOUND_VIOLATED,
                        arg.span(),
                        format!("knot {} of `{name}` moves with time or a factor; a knot is a fixed time", count + 1),
                    )
                    .with_help("write a time such as `6 [month]`, or a constant expression of parameters"),
                );
                sound = false;
                continue;
            }
            let value = expr.eval(&params, &[], 0.0);
            if let Some(before) = previous {
                if value.is_finite() && before.is_finite() && value <= before {
                    self.diagnostics.push(
                        Diagnostic::new(
                            &rules::BOUND_VIOLATED,
                            arg.span(),
                            format!(
                                "knot {} of `{name}` is at {} {clock}, not after the knot before it ({} {clock})",
                                count + 1,
                                fmt_num(value),
                                fmt_num(before)
                            ),
                        )
                        .with_label("not after the previous knot")
                        .with_help("the knots of a schedule must be strictly increasing times"),
                    );
                    sound = false;
                }
            }
            previous = Some(value);
        }
        let value_positions: Vec<usize> = {
            let knots: Vec<usize> = f.knot_positions(args.len()).collect();
            (1..args.len()).filter(|k| !knots.contains(k)).collect()
        };
        // The values' dimension is that of the first one written with its unit: a bare
        // `0` among them is then the one reported.
        let dimension: Option<Dimension> = value_positions
            .iter()
            .find(|k| args.get(**k).is_some_and(|a| !is_zero_literal(a)))
            .or(value_positions.first())
            .and_then(|k| dims.get(*k).cloned().flatten());
        for k in value_positions {
            let (Some(arg), Some(found)) = (args.get(k), dims.get(k)) else {
                continue;
            };
            let Some(found) = found else {
                sound = false;
                continue;
            };
            match &dimension {
                None => {}
                Some(first) if first != found => {
                    let d = self.bare_zero(arg, first).unwrap_or_else(|| {
                        dimension_error(
                            arg.span(),
                            format!(
                                "the values of `{name}` share one dimension: the first is {}, this one {}",
                                first.describe(),
                                found.describe()
                            ),
                        )
                        .with_help("write every value in the same unit")
                    });
                    self.diagnostics.push(d);
                    sound = false;
                }
                Some(_) => {}
            }
        }
        if sound {
            dimension
        } else {
            None
        }
    }

    /// Two common slips that look like a call of an unknown function: a declared value
    /// followed by `(` (`kappa(theta - r)`, a product without its `*`) and `ln` for the
    /// natural logarithm. Reports the slip with a fix; for a product the name still counts
    /// as used, so it is not also reported as unused. `None` for any other unknown name.
    fn misread_call(
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

    fn resolve_name(&mut self, ident: &ast::Ident) -> (Expr, Option<Dimension>) {
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
            self.undefined(ident, "");
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

    fn reference(&mut self, ident: &ast::Ident, target: &Target) {
        // A name may be used while its own declaration is being resolved (`param k = k`),
        // before it is in the model: no reference is recorded then.
        let name_span = match *target {
            Target::Param(i) => self.model.params.get(i).map(|p| p.name_span.clone()),
            Target::Factor(i) => self.model.factors.get(i).map(|f| f.name_span.clone()),
            Target::Shock(i) => self.model.shocks.get(i).map(|n| n.name_span.clone()),
            Target::Let(i) => self.model.lets.get(i).map(|l| l.name_span.clone()),
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

    fn undefined(&mut self, ident: &ast::Ident, what: &str) {
        let mut d = Diagnostic::new(
            &rules::UNKNOWN_NAME,
            ident.span.clone(),
            format!("{what}`{}` is not declared", ident.name),
        );
        if let Some(close) = closest_name(&ident.name, self.names.keys()) {
            d = d.with_help(format!("did you mean `{close}`?"));
        } else {
            d = d.with_help(format!("declare it, e.g. `param {} = 1`", ident.name));
        }
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

    fn correlations(&mut self) {
        let file = self.file;
        let mut seen: HashMap<(usize, usize), Span> = HashMap::new();
        for statement in &file.statements {
            let StatementKind::Corr {
                first,
                second,
                value,
            } = &statement.kind
            else {
                continue;
            };
            let a = self.noise_named(first);
            let b = self.noise_named(second);
            let (Some(a), Some(b)) = (a, b) else { continue };
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
                continue;
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
                continue;
            }
            if dimension.is_none() || expr.is_invalid() {
                continue;
            }
            let rho = expr.eval(&self.model.param_values(), &[], 0.0);
            written.value = Some(rho);
            written.written_as_number = matches!(expr, Expr::Const(_)) || is_negated_number(value);
            let kept = written.is_correlation();
            self.structure.correlations.push(written);
            if !kept {
                continue;
            }
            let mut mentioned = Vec::new();
            expr.params(&mut mentioned);
            let key = (a.min(b), a.max(b));
            if let Some(prev) = seen.get(&key) {
                self.diagnostics.push(
                    Diagnostic::new(
                        &rules::DUPLICATE_NAME,
                        statement.span.clone(),
                        format!(
                            "the correlation of `{}` and `{}` is given twice",
                            first.name, second.name
                        ),
                    )
                    .with_related(prev.clone(), "first given here")
                    .with_help("keep one `corr` statement per pair of shocks"),
                );
                continue;
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
    }

    fn noise_named(&mut self, ident: &ast::Ident) -> Option<usize> {
        match self.names.get(&ident.name).cloned() {
            Some((Target::Shock(i), _)) => {
                self.reference(ident, &Target::Shock(i));
                Some(i)
            }
            Some(_) => {
                self.diagnostics.push(
                    Diagnostic::new(
                        &rules::UNKNOWN_NAME,
                        ident.span.clone(),
                        format!("`{}` is not a shock", ident.name),
                    )
                    .with_help("`corr` relates two shocks declared with `shock`"),
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

    fn equations(&mut self) {
        let file = self.file;
        let mut first_equation: HashMap<usize, Span> = HashMap::new();
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
        self.structure.equation_unparsed = (0..self.model.factors.len())
            .map(|i| self.equation_unparsed(i))
            .collect();
    }

    /// Whether text that did not parse may hold the equation of factor `i`: `dr = ...`,
    /// and the slips `d r = ...` and `dr/dt = ...`.
    fn equation_unparsed(&self, i: usize) -> bool {
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
    fn mark_uses(&mut self, eq: &ast::Equation) {
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

    fn equation(&mut self, state: usize, eq: &ast::Equation, span: &Span) -> Equation {
        let state_dim = self.model.factors[state].dimension.clone();
        let state_unit_ok = self.state_unit_ok[state];
        let state_name = self.model.factors[state].name.clone();
        let drift_dim = state_dim.div(&Dimension::time());
        let diffusion_dim = state_dim.div(&Dimension::time().sqrt());
        let mut drift: Option<Expr> = None;
        let mut drift_span: Option<Span> = None;
        let mut diffusion: Vec<DiffusionTerm> = Vec::new();
        let mut noise_terms: HashMap<usize, Span> = HashMap::new();
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
            match &term.differential {
                ast::Differential::Time(_) => {
                    if let Some(prev) = &drift_span {
                        self.structure.repeated_terms.push(RepeatedTerm {
                            factor: state,
                            differential: Differential::Time,
                            span: term.span.clone(),
                            first: prev.clone(),
                        });
                        continue;
                    }
                    if let (Some(d), true) = (&dim, state_unit_ok) {
                        self.check_coefficient(term, d, &drift_dim, &state_name, &state_dim, true);
                    }
                    drift = Some(coefficient);
                    drift_span = Some(term.span.clone());
                }
                ast::Differential::Shock {
                    shock: noise,
                    token,
                } => {
                    let noise_index = match self.names.get(&noise.name).cloned() {
                        Some((Target::Shock(i), _)) => {
                            self.reference(noise, &Target::Shock(i));
                            i
                        }
                        other => {
                            let token_text = format!("d{}", noise.name);
                            let mut d = Diagnostic::new(
                                &rules::UNKNOWN_NAME,
                                token.clone(),
                                match other {
                                    Some(_) => format!(
                                        "`{token_text}` ends a term, but `{}` is not a shock",
                                        noise.name
                                    ),
                                    None => format!(
                                        "`{token_text}` ends a term, but no shock `{}` is declared",
                                        noise.name
                                    ),
                                },
                            );
                            let similar = (other.is_none())
                                .then(|| {
                                    closest_name(
                                        &noise.name,
                                        self.model.shocks.iter().map(|n| &n.name),
                                    )
                                })
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
                                d = d.with_help(format!(
                                    "declare the shock with `shock {}`",
                                    noise.name
                                ));
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
                            self.diagnostics.push(d);
                            continue;
                        }
                    };
                    if let Some(prev) = noise_terms.get(&noise_index) {
                        self.structure.repeated_terms.push(RepeatedTerm {
                            factor: state,
                            differential: Differential::Shock(noise_index),
                            span: term.span.clone(),
                            first: prev.clone(),
                        });
                        continue;
                    }
                    noise_terms.insert(noise_index, term.span.clone());
                    self.noise_used[noise_index] = true;
                    if let (Some(d), true) = (&dim, state_unit_ok) {
                        self.check_coefficient(
                            term,
                            d,
                            &diffusion_dim,
                            &state_name,
                            &state_dim,
                            false,
                        );
                    }
                    diffusion.push(DiffusionTerm {
                        noise: noise_index,
                        coefficient,
                        span: term.span.clone(),
                    });
                }
            }
        }
        Equation {
            span: span.clone(),
            lhs_span: eq.lhs.clone(),
            drift: drift.unwrap_or(Expr::Const(0.0)),
            drift_span,
            diffusion,
        }
    }

    fn check_coefficient(
        &mut self,
        term: &ast::Term,
        found: &Dimension,
        needed: &Dimension,
        state: &str,
        state_dim: &Dimension,
        is_drift: bool,
    ) {
        if found == needed {
            return;
        }
        let clock = self.clock_unit().to_string();
        let span = term
            .coefficient
            .as_ref()
            .map(|c| c.span())
            .unwrap_or(term.span.clone());
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
        // Which parameter would mend it, if the coefficient is a product with one.
        let culprit = term.coefficient.as_ref().and_then(|c| self.factor_param(c));
        let mut message;
        let mut d;
        if let Some((param_index, ident_span)) = culprit {
            let p = &self.model.params[param_index];
            let wanted = needed.div(found).mul(&p.dimension);
            let suggestion = suggest_unit_text(&wanted, &clock);
            message = format!(
                "`{}` is {}, but the {which} of {state_words} must be {} ({which} is the factor's dimension {per}): did you mean [{suggestion}]?",
                p.name,
                p.dimension.describe(),
                needed.describe(),
            );
            if found.div(&p.dimension).is_dimensionless() {
                // The coefficient is the parameter alone (up to numbers).
            } else {
                message = format!(
                    "the {which} coefficient of {state_words} is {}, but must be {} ({which} is the factor's dimension {per}); if `{}` is the culprit, did you mean [{suggestion}]?",
                    found.describe(),
                    needed.describe(),
                    p.name,
                );
            }
            d = dimension_error(span, message).with_label(format!("{} here", found.describe()));
            d = d.with_related(
                ident_span,
                format!(
                    "`{}` is declared in [{}]",
                    p.name,
                    p.unit_text.clone().unwrap_or_else(|| "1".to_string())
                ),
            );
            if let Some(Some((unit_span, _))) = self.param_units.get(param_index) {
                let unit_span = unit_span.clone();
                d = d.with_fix(
                    format!(
                        "Declare `{}` in [{suggestion}]",
                        self.model.params[param_index].name
                    ),
                    vec![TextEdit {
                        span: unit_span,
                        new_text: suggestion.clone(),
                    }],
                );
            } else {
                let at = self.model.params[param_index].span.clone();
                let value_end = self.param_value_end(param_index).unwrap_or(at.end);
                d = d.with_fix(
                    format!(
                        "Declare `{}` in [{suggestion}]",
                        self.model.params[param_index].name
                    ),
                    vec![TextEdit {
                        span: value_end..value_end,
                        new_text: format!(" [{suggestion}]"),
                    }],
                );
            }
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

    fn param_value_end(&self, param_index: usize) -> Option<usize> {
        let name = &self.model.params[param_index].name;
        self.file.statements.iter().find_map(|s| match &s.kind {
            StatementKind::Param(decl) if &decl.name.name == name => Some(decl.value_span().end),
            _ => None,
        })
    }

    /// The first parameter that appears as a factor at the top of a product.
    fn factor_param(&self, e: &ast::Expr) -> Option<(usize, Span)> {
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

    /// `measure` and `discount`: the rate is read per year when dimensionless and per
    /// its own time unit when its dimension is 1/time.
    fn short_rate(&mut self) {
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

    fn expectations(&mut self) {
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

    /// The factor an expectation names, or a diagnostic.
    fn expected_factor(&mut self, ident: &ast::Ident) -> Option<usize> {
        match self.names.get(&ident.name).cloned() {
            Some((Target::Factor(i), _)) => {
                self.reference(ident, &Target::Factor(i));
                Some(i)
            }
            Some(_) => {
                self.diagnostics.push(
                    Diagnostic::new(
                        &rules::UNKNOWN_NAME,
                        ident.span.clone(),
                        format!("`{}` is not a factor", ident.name),
                    )
                    .with_help("expectations pin figures of a factor"),
                );
                None
            }
            None => {
                self.undefined(ident, "factor ");
                None
            }
        }
    }

    /// A value of the factor `state` as written in an expectation (a level of `prob`, a
    /// bound of `quantile`), converted to clock units; `what` names it in messages.
    fn factor_value(&mut self, state: usize, q: &ast::Quantity, what: &str) -> Option<f64> {
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
    fn plain_value(&mut self, q: &ast::Quantity, what: &str) -> Option<f64> {
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
    fn annual_rate(&mut self, q: &ast::Quantity, what: &str) -> Option<f64> {
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

    fn expectation(&mut self, x: &ast::Expectation, span: Span) -> Option<Expectation> {
        let state = match &x.state {
            Some(ident) => Some(self.expected_factor(ident)?),
            None => None,
        };
        let at = match &x.at {
            Some(q) => {
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
                Some(t)
            }
            None => None,
        };
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
        let written_percent = match &x.condition {
            ast::Condition::Compare { value, .. } => value.number.text.ends_with('%'),
            ast::Condition::Within { lower, upper, .. } => {
                lower.number.text.ends_with('%') || upper.number.text.ends_with('%')
            }
        };
        let factor_shown = |this: &Self, i: usize, percent: bool| {
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
        let at_text = x.at.as_ref().and_then(|q| {
            let text = self.source.get(q.span.clone())?;
            Some(text.split_whitespace().collect::<Vec<_>>().join(" "))
        });
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

    /// How a message shows a moment or a half-life: as the bound is written. A mean or sd
    /// of a dimensionless factor bounded in `%` or `bp` is shown in %/bp; a half-life
    /// bounded in a time unit (`10 day`) in that unit; anything else in clock units.
    fn moment_shown(&self, figure: Figure, state: usize, condition: &ast::Condition) -> Shown {
        let bounds: Vec<&ast::Quantity> = match condition {
            ast::Condition::Compare { value, .. } => vec![value],
            ast::Condition::Within { lower, upper, .. } => vec![lower, upper],
        };
        let dimensionless = self
            .model
            .factors
            .get(state)
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
    fn moment_bound(
        &mut self,
        figure: Figure,
        state: usize,
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

/// Whether `e` is a number, possibly negated (`-0.4`).
fn is_negated_number(e: &ast::Expr) -> bool {
    match e {
        ast::Expr::Number(_) => true,
        ast::Expr::Neg { operand, .. } | ast::Expr::Paren { inner: operand, .. } => {
            is_negated_number(operand)
        }
        _ => false,
    }
}

/// The offset just after the line that holds `offset` (after its line break).
fn line_end_after(source: &str, offset: usize) -> usize {
    sdeck_syntax::lines::next_line_start(source, offset)
}

/// The offset where the line holding `offset` starts.
fn line_start_of(source: &str, offset: usize) -> usize {
    sdeck_syntax::lines::line_start(source, offset)
}

fn is_zero_literal(e: &ast::Expr) -> bool {
    match e {
        ast::Expr::Number(n) => n.value == 0.0,
        ast::Expr::Paren { inner, .. } => is_zero_literal(inner),
        _ => false,
    }
}

fn contains_state_or_time(e: &Expr) -> bool {
    match e {
        Expr::Factor(_) | Expr::Time => true,
        Expr::Const(_) | Expr::Param(_) | Expr::Invalid => false,
        Expr::Neg(a) => contains_state_or_time(a),
        Expr::Add(a, b) | Expr::Sub(a, b) | Expr::Mul(a, b) | Expr::Div(a, b) | Expr::Pow(a, b) => {
            contains_state_or_time(a) || contains_state_or_time(b)
        }
        Expr::Call(_, args) => args.iter().any(contains_state_or_time),
    }
}

/// A simple fraction (denominator up to 12) equal to `x` to 1e-9, if any.
fn rational_approx(x: f64) -> Option<Rational> {
    if !x.is_finite() {
        return None;
    }
    for den in 1..=12i64 {
        let num = (x * den as f64).round();
        if (num / den as f64 - x).abs() < 1e-9 && num.abs() < 1e6 {
            return Rational::new(num as i64, den);
        }
    }
    None
}

fn convert_bound(b: &ast::Bound, scale: f64) -> Interval {
    let s = if scale.is_finite() { scale } else { 1.0 };
    Interval {
        lower: b.lower.as_ref().map(|e| (e.value.value * s, e.inclusive)),
        upper: b.upper.as_ref().map(|e| (e.value.value * s, e.inclusive)),
    }
}

/// The declared name closest to `name` by edit distance, if close enough to be a typo.
fn closest_name<'n>(name: &str, candidates: impl Iterator<Item = &'n String>) -> Option<String> {
    let mut best: Option<(usize, &String)> = None;
    for c in candidates {
        let d = sdeck_diagnostics::edit_distance(name, c);
        let limit = (name.chars().count().max(c.chars().count()) / 3).max(1);
        if d <= limit && best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, c));
        }
    }
    best.map(|(_, c)| c.clone())
}
