//! The rules decided on the finished analysis and its derivation, one module each
//! (detection, message and fixes), and the registry that runs them in order. Only what
//! arises while names are resolved or units inferred is reported by `sdeck-semantics`.
//!
//! Adding a rule here: write `NAME.rs` with `pub(super) fn run(cx: &Context, out: &mut
//! Vec<Diagnostic>)`, declare the module below and add its line to [`REGISTRY`].

mod bound_violated;
mod correlation_not_psd;
mod correlation_range;
mod discount_measure;
mod duplicate_term;
mod expectation_failed;
mod factor_domain;
mod feller_condition;
pub mod implausible_value;
mod missing_equation;
mod moment_explosion;
mod no_factor;
mod not_mean_reverting;
mod shared;
mod unit_scale;
mod unused;

use sdeck_calculus::Derivation;
use sdeck_diagnostics::{Diagnostic, RuleId};
use sdeck_semantics::{Analysis, Model};

/// What a rule may read: the text, the analysis (tree, model, names) and the derivation.
pub struct Context<'a> {
    pub source: &'a str,
    pub analysis: &'a Analysis,
    pub model: &'a Model,
    pub derivation: &'a Derivation,
    /// Whether the analysis found an error: the model may be incomplete.
    pub broken: bool,
    /// The thresholds of `implausible-value` (the project's, or the defaults).
    pub plausibility: implausible_value::Plausibility,
    /// Whether the text checked is stale (a newer version waits): rules with a loop over
    /// many items ask it and stop early; [`run_all`] asks it before each rule.
    pub stale: &'a (dyn Fn() -> bool + Sync),
}

impl<'a> Context<'a> {
    pub fn new(source: &'a str, analysis: &'a Analysis, derivation: &'a Derivation) -> Self {
        Context {
            source,
            analysis,
            model: &analysis.model,
            derivation,
            broken: analysis.has_errors(),
            plausibility: implausible_value::Plausibility::default(),
            stale: &|| false,
        }
    }

    /// The same context, giving up when `stale` answers yes.
    pub fn with_stale(mut self, stale: &'a (dyn Fn() -> bool + Sync)) -> Self {
        self.stale = stale;
        self
    }

    /// The same context with the project's thresholds for `implausible-value`.
    pub fn with_plausibility(mut self, plausibility: implausible_value::Plausibility) -> Self {
        self.plausibility = plausibility;
        self
    }
}

/// A rule's detection: appends what it finds to `out`.
type Runner = fn(&Context, &mut Vec<Diagnostic>);

/// Every rule decided on the finished analysis, with the runner that decides it, in the
/// order they run.
static REGISTRY: &[(RuleId, Runner)] = &[
    (RuleId::MissingEquation, missing_equation::run),
    (RuleId::DuplicateTerm, duplicate_term::run),
    (RuleId::BoundViolated, bound_violated::run),
    (RuleId::CorrelationRange, correlation_range::run),
    (RuleId::FellerCondition, feller_condition::run),
    (RuleId::FactorDomain, factor_domain::run),
    (RuleId::NotMeanReverting, not_mean_reverting::run),
    (RuleId::ImplausibleValue, implausible_value::run),
    (RuleId::MomentExplosion, moment_explosion::run),
    (RuleId::DiscountMeasure, discount_measure::run),
    (RuleId::CorrelationNotPsd, correlation_not_psd::run),
    (RuleId::ExpectationFailed, expectation_failed::run),
    (RuleId::NoFactor, no_factor::run),
    (RuleId::Unused, unused::run),
    (RuleId::UnitScale, unit_scale::run),
];

/// The rules the registry runs, in order.
pub fn registered() -> impl Iterator<Item = RuleId> {
    REGISTRY.iter().map(|(rule, _)| *rule)
}

/// Every diagnostic of the registered rules; abandoned when the context turns stale.
pub fn run_all(cx: &Context) -> Result<Vec<Diagnostic>, crate::Abandoned> {
    let mut out = Vec::new();
    for (_, run) in REGISTRY {
        if (cx.stale)() {
            return Err(crate::Abandoned);
        }
        run(cx, &mut out);
    }
    Ok(out)
}

#[cfg(test)]
mod tests;
