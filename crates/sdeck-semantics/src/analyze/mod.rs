//! From the syntax tree to the semantic model: names, units, values in clock units, and
//! the diagnostics that arise while names are resolved and units inferred (syntax,
//! unknown-name, duplicate-name, dimension-mismatch, and the bound-violated and
//! missing-equation cases that stop a value or an equation from entering the model).
//! What the structural rules of sdeck-checks read beside the model is kept in
//! [`Structure`].
//!
//! One [`Analyzer`] walks the statements once, in [`Analyzer::run`]'s order; its methods
//! live in the module of the stage they belong to:
//!
//! 1. names (`names.rs`): settings, declarations, what each use of a name refers to;
//! 2. units (`units.rs`, `schedules.rs`): expressions resolved with their dimensions,
//!    quantities converted to the clock;
//! 3. lowering to the model the calculus reads (`lower.rs`: lets, correlations, the
//!    short rate; `equations.rs`; `expectations.rs`).
//!
//! A stage calls the one before it for each expression (a let is resolved where it is
//! first used), so the stages are modules of one pass rather than passes of their own.

mod equations;
mod expectations;
mod lower;
mod names;
mod schedules;
mod units;

use crate::model::*;
use crate::structure::{Differential, RepeatedTerm, Structure, WrittenCorrelation};
use crate::symbols::{Reference, Symbol, SymbolKind};
use sdeck_diagnostics::{rules, Diagnostic, Span, TextEdit};
use sdeck_syntax::ast::{self, Figure, StatementKind};
use sdeck_units::{
    eval_unit_with_names, is_time_unit, number, suggest_unit_text, time_unit_years, Dimension,
    Rational, UnitValue,
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

/// Which declared names something uses, by declaration.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Usage {
    pub params: IdVec<ParamId, bool>,
    pub shocks: IdVec<ShockId, bool>,
    pub lets: IdVec<LetId, bool>,
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
            || model.factors.ids().any(|i| self.lacks_equation(i))
    }

    /// The declaration of the parameter `id` of the model.
    pub fn param_declaration(&self, id: ParamId) -> Option<&ast::Declaration> {
        let statement = self
            .file
            .statements
            .get(*self.structure.param_statements.by_id(id)?)?;
        match &statement.kind {
            StatementKind::Param(decl) => Some(decl),
            _ => None,
        }
    }

    /// The declaration of the factor `id` of the model.
    pub fn factor_declaration(&self, id: FactorId) -> Option<&ast::Declaration> {
        let statement = self
            .file
            .statements
            .get(*self.structure.factor_statements.by_id(id)?)?;
        match &statement.kind {
            StatementKind::Factor(decl) => Some(decl),
            _ => None,
        }
    }

    /// Whether the factor `id` has no equation, and none hides in text that did not
    /// parse.
    pub fn lacks_equation(&self, id: FactorId) -> bool {
        self.model
            .factors
            .by_id(id)
            .is_some_and(|f| f.equation.is_none())
            && !self
                .structure
                .equation_unparsed
                .by_id(id)
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
    // A name whose declaration did not parse has its syntax error already: reporting
    // each use as undeclared (with a guess at another name), or its equation as naming
    // no factor, would only mislead.
    let declared = names::declared_in_unparsed(&file, source);
    if !declared.is_empty() {
        let follows_on = [rules::UNKNOWN_NAME.id, rules::MISSING_EQUATION.id];
        diagnostics.retain(|d| {
            !follows_on.contains(&d.rule)
                || !names::names_one_of(source.get(d.span.clone()).unwrap_or(""), &declared)
        });
    }
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
    Param(ParamId),
    Factor(FactorId),
    Shock(ShockId),
    Let(LetId),
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
    let_asts: IdVec<LetId, &'a ast::Expr>,
    let_progress: IdVec<LetId, LetProgress>,
    param_used: IdVec<ParamId, bool>,
    /// Whether a param's (or state's) unit evaluated; when not, its dimension is unknown
    /// and no dimension error is reported downstream of it.
    param_unit_ok: IdVec<ParamId, bool>,
    state_unit_ok: IdVec<FactorId, bool>,
    noise_used: IdVec<ShockId, bool>,
    let_used: IdVec<LetId, bool>,
    /// Nodes in the expression being resolved, each let counted at its inlined size.
    expanded: usize,
    /// Inlined size of each resolved let.
    let_sizes: IdVec<LetId, usize>,
    /// Unit spans of param/state declarations, for fixes.
    param_units: IdVec<ParamId, Option<(Span, String)>>,
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
                params: IdVec::new(),
                factors: IdVec::new(),
                shocks: IdVec::new(),
                correlations: Vec::new(),
                lets: IdVec::new(),
                expectations: Vec::new(),
                measure: None,
                discount: None,
            },
            diagnostics: Vec::new(),
            symbols: Vec::new(),
            references: Vec::new(),
            names: HashMap::new(),
            let_asts: IdVec::new(),
            let_progress: IdVec::new(),
            param_used: IdVec::new(),
            param_unit_ok: IdVec::new(),
            state_unit_ok: IdVec::new(),
            noise_used: IdVec::new(),
            let_used: IdVec::new(),
            param_units: IdVec::new(),
            expanded: 0,
            let_sizes: IdVec::new(),
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

/// The declared name closest to `name` by edit distance, if close enough to be a typo
/// (at most a third of the longer name's length, at least 1; case counts).
fn closest_name<'n>(name: &str, candidates: impl Iterator<Item = &'n String>) -> Option<String> {
    use sdeck_diagnostics::{closest_within, Case};
    closest_within(name, candidates.map(String::as_str), Case::Kept, |a, b| {
        (a.max(b) / 3).max(1)
    })
    .map(str::to_string)
}
