//! The one analysis entry point of sdeck, called by the CLI and the language server alike.
//!
//! [`check`] runs the layers in order (syntax → semantics → calculus → the rules of
//! [`rules`], one module each),
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

pub mod reuse;
pub mod rules;
pub mod suppress;

pub use rules::{manual, Manual, Plausibility};
use sdeck_calculus::Derivation;
use sdeck_diagnostics::{Diagnostic, RuleId, Severity};
use sdeck_semantics::Analysis;
use std::collections::HashMap;

/// The level a project gives a rule: a severity, or off.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RuleLevel {
    Off,
    On(Severity),
}

/// Per-rule levels that override the default severities, and the thresholds of
/// `implausible-value`.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RuleSettings {
    pub levels: HashMap<RuleId, RuleLevel>,
    pub plausibility: Plausibility,
}

impl RuleSettings {
    /// The severity of `rule` under these settings; `None` when it is off.
    pub fn severity(&self, rule: RuleId, default: Severity) -> Option<Severity> {
        match self.levels.get(&rule) {
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
    /// The content key of each factor and of the derivation ([`reuse`]): what a later
    /// version may take over.
    pub keys: reuse::ContentKeys,
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
    match check_unless_stale(source, name, settings, &|| false) {
        Ok(check) => check,
        // `stale` above never answers yes, so no check is abandoned.
        Err(Abandoned) => unreachable!("a check that is never stale ran to its end"),
    }
}

/// A check given up because its text became stale (the editor has a newer version).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Abandoned;

/// [`check`], asking `stale` at its cancellation points (after the semantics, after the
/// derivation, before each rule and each expectation) and giving up as soon as it answers
/// yes: the language server stops analysing a version the user has already typed past.
pub fn check_unless_stale(
    source: &str,
    name: &str,
    settings: &RuleSettings,
    stale: &(dyn Fn() -> bool + Sync),
) -> Result<FileCheck, Abandoned> {
    check_reusing(source, name, settings, stale, &reuse::Reuse::default())
}

/// [`check_unless_stale`], taking over from `reuse` what earlier versions of the same
/// document derived: the derivation when the model's content is the same (an edit to a
/// comment or an expectation), and the value of every expectation whose factor's content
/// is the same. What this version derives is kept in `reuse` for the next one.
pub fn check_reusing(
    source: &str,
    name: &str,
    settings: &RuleSettings,
    stale: &(dyn Fn() -> bool + Sync),
    reuse: &reuse::Reuse,
) -> Result<FileCheck, Abandoned> {
    let analysis = sdeck_semantics::analyze(source, name);
    if stale() {
        return Err(Abandoned);
    }
    let keys = reuse::ContentKeys::of(&analysis.model);
    let derivation = reuse.derivation(&analysis.model, keys.derivation);
    if stale() {
        return Err(Abandoned);
    }
    let mut diagnostics = rules::run_all(
        &rules::Context::new(source, &analysis, &derivation)
            .with_plausibility(settings.plausibility)
            .with_stale(stale)
            .with_reuse(reuse, &keys),
    )?;
    // The analysis's own findings first, inserted in place (a file can hold 200,000
    // findings: no second vector of them).
    diagnostics.splice(0..0, analysis.diagnostics.iter().cloned());
    let diagnostics = finish(source, &analysis.file, diagnostics, settings);
    reuse.finish_version();
    Ok(FileCheck {
        analysis,
        derivation,
        keys,
        diagnostics,
    })
}

/// Applies suppressions and settings, then sorts.
fn finish(
    source: &str,
    file: &sdeck_syntax::ast::SourceFile,
    diagnostics: Vec<Diagnostic>,
    settings: &RuleSettings,
) -> Vec<Diagnostic> {
    let mut out = suppress::apply(source, file, diagnostics);
    out.retain_mut(|d| match settings.severity(d.rule, d.severity) {
        Some(severity) => {
            d.severity = severity;
            true
        }
        None => false,
    });
    // Same place: the rules in catalogue order.
    // By cached key: as stable as `sort_by_key`, with a scratch of keys rather than of
    // findings.
    out.sort_by_cached_key(|d| (d.span.start, d.span.end, d.rule));
    out.dedup_by(|a, b| a.span == b.span && a.rule == b.rule && a.message == b.message);
    out
}
