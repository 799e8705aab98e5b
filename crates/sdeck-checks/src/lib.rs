//! The one analysis entry point of sdeck, called by the CLI and the language server alike.
//!
//! [`check`] runs the layers in order (syntax → semantics → calculus → derived checks),
//! applies the suppression comments of the file and the rule settings of the project,
//! and returns everything a face needs: the tree, the model, the derivation and the final
//! diagnostics, sorted by position. Nothing here does IO.
//!
//! ```
//! let result = sdeck_checks::check(
//!     "param kappa = 2 [1/year] > 0\nshock W\nfactor x = 0\ndx = -kappa * x dt + 0.1 [1/sqrt(year)] dW\n",
//!     "demo",
//!     &sdeck_checks::RuleSettings::default(),
//! );
//! // A number with a bracketed unit is a quantity inside an expression too.
//! assert!(result.diagnostics.is_empty(), "{:?}", result.diagnostics);
//! ```

mod derived;
pub mod suppress;

pub use derived::{derived_checks, feller_bounds, feller_number, FellerBounds};

use sdeck_calculus::Derivation;
use sdeck_diagnostics::{rules, Diagnostic, Severity};
use sdeck_semantics::Analysis;
use std::collections::HashMap;

/// The level a project gives a rule: a severity, or off.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RuleLevel {
    Off,
    On(Severity),
}

/// Per-rule levels that override the default severities.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RuleSettings {
    pub levels: HashMap<String, RuleLevel>,
}

impl RuleSettings {
    /// The severity of `rule` under these settings; `None` when it is off.
    pub fn severity(&self, rule: &str, default: Severity) -> Option<Severity> {
        match self.levels.get(rule) {
            Some(RuleLevel::Off) => None,
            Some(RuleLevel::On(s)) => Some(*s),
            None => Some(default),
        }
    }
}

/// Everything known about one file.
#[derive(Debug)]
pub struct FileCheck {
    pub analysis: Analysis,
    pub derivation: Derivation,
    /// The final diagnostics: suppressions and settings applied, sorted by position.
    pub diagnostics: Vec<Diagnostic>,
}

impl FileCheck {
    pub fn count(&self, severity: Severity) -> usize {
        self.diagnostics
            .iter()
            .filter(|d| d.severity == severity)
            .count()
    }
}

/// Analyses one file's text. `name` is the model's default name (the file's stem).
pub fn check(source: &str, name: &str, settings: &RuleSettings) -> FileCheck {
    let analysis = sdeck_semantics::analyze(source, name);
    let derivation = sdeck_calculus::derive(&analysis.model);
    let mut diagnostics = analysis.diagnostics.clone();
    let broken = analysis.has_errors();
    for d in derived_checks(&analysis.model, &derivation) {
        // On a model with errors the derived figures may rest on what did not resolve;
        // pinned expectations wait until the model is sound.
        if broken && d.rule == rules::EXPECTATION_FAILED.name {
            continue;
        }
        diagnostics.push(d);
    }
    if !broken && analysis.model.factors.is_empty() {
        diagnostics.push(no_factor(&analysis.file));
    }
    let diagnostics = finish(source, &analysis.file, diagnostics, settings);
    FileCheck {
        analysis,
        derivation,
        diagnostics,
    }
}

/// `no-factor`, at the `model` line, else the first statement, else the start of the file.
fn no_factor(file: &sdeck_syntax::ast::SourceFile) -> Diagnostic {
    use sdeck_syntax::ast::StatementKind;
    let span = file
        .statements
        .iter()
        .find(|s| matches!(s.kind, StatementKind::Model { .. }))
        .or(file.statements.first())
        .map_or(0..0, |s| s.span.clone());
    let what = if file.statements.is_empty() {
        "the file holds no statement"
    } else {
        "the model declares no factor"
    };
    Diagnostic::new(
        &rules::NO_FACTOR,
        span,
        format!("{what}: nothing is derived, and no equation, unit or figure is checked"),
    )
    .with_help("declare a factor and its equation (`factor r = 2%` and `dr = ... dt + ... dW`), or leave this file out of the paths checked")
}

/// Applies suppressions and settings, then sorts.
fn finish(
    source: &str,
    file: &sdeck_syntax::ast::SourceFile,
    diagnostics: Vec<Diagnostic>,
    settings: &RuleSettings,
) -> Vec<Diagnostic> {
    let mut out: Vec<Diagnostic> = suppress::apply(source, file, diagnostics)
        .into_iter()
        .filter_map(|mut d| {
            let severity = settings.severity(d.rule, d.severity)?;
            d.severity = severity;
            Some(d)
        })
        .collect();
    out.sort_by(|a, b| (a.span.start, a.span.end, a.rule).cmp(&(b.span.start, b.span.end, b.rule)));
    out.dedup_by(|a, b| a.span == b.span && a.rule == b.rule && a.message == b.message);
    out
}
