//! The rules decided on the finished analysis and its derivation, one module each
//! (detection, message and fixes), and the registry that runs them in order. Only what
//! arises while names are resolved or units inferred is reported by `sdeck-semantics`.
//!
//! Adding a rule here: its line, marked `checked`, in the one list of rules
//! (`sdeck-diagnostics/src/rules/list.rs`), `NAME.rs` with `pub(super) fn run(cx:
//! &Context, out: &mut Vec<Diagnostic>)` and, beside it, its manual and examples
//! `NAME.md` (see [`manual`]); the list declares the module, registers it and reads the
//! manual. Every rule of the list has its `NAME.md` here, the ones reported while the
//! text is parsed, names resolved or units inferred too.

mod manual;

pub use manual::{manual, Manual};

/// Builds the registry from the one list of rules (`sdeck-diagnostics/src/rules/list.rs`):
/// each rule marked `checked` has its module here, whose `run` decides it; every rule has
/// its manual `NAME.md`.
macro_rules! rules {
    ($(
        $variant:ident => $constant:ident, $module:ident, $name:literal, $severity:ident,
        $summary:literal $(, $checked:ident)?;
    )*) => {
        $(rule_module!($module $(, $checked)?);)*

        /// Every rule of the catalogue, in its order, with the runner that decides it when
        /// this crate does.
        static REGISTRY: &[(RuleId, Option<Runner>)] =
            &[$((RuleId::$variant, runner!($module $(, $checked)?)),)*];

        /// Every rule's manual page, in the catalogue's order.
        static PAGES: &[&str] = &[$(include_str!(concat!(stringify!($module), ".md")),)*];
    };
}

/// The module of a rule decided here.
macro_rules! rule_module {
    ($module:ident) => {};
    ($module:ident, checked) => {
        mod $module;
    };
}

/// The runner of a rule decided here; `None` for the others.
macro_rules! runner {
    ($module:ident) => {
        None
    };
    ($module:ident, checked) => {
        Some($module::run as Runner)
    };
}

sdeck_diagnostics::for_each_rule!(rules);

mod shared;

pub use implausible_value::Plausibility;

use crate::reuse::{ContentKeys, Reuse};
use sdeck_calculus::affine::WorkBudget;
use sdeck_calculus::Derivation;
use sdeck_diagnostics::{Diagnostic, RuleId};
use sdeck_semantics::{Analysis, Expectation, Model};

/// What a rule may read: the text, the analysis (tree, model, names) and the derivation.
pub struct Context<'a> {
    pub source: &'a str,
    pub analysis: &'a Analysis,
    pub model: &'a Model,
    pub derivation: &'a Derivation,
    /// Whether the analysis found an error: the model may be incomplete.
    pub broken: bool,
    /// The thresholds of `implausible-value` (the project's, or the defaults).
    pub plausibility: Plausibility,
    /// Whether the text checked is stale (a newer version waits): rules with a loop over
    /// many items ask it and stop early; [`run_all`] asks it before each rule.
    pub stale: &'a (dyn Fn() -> bool + Sync),
    /// What earlier versions of the document derived, and the keys of this one.
    reuse: Option<(&'a Reuse, &'a ContentKeys)>,
    /// The Riccati work the laws of the expectations share: a file of many `expect`
    /// lines on a law that is hard to invert spends one budget, not one per line.
    work: WorkBudget,
}

impl<'a> Context<'a> {
    pub fn new(source: &'a str, analysis: &'a Analysis, derivation: &'a Derivation) -> Self {
        Context {
            source,
            analysis,
            model: &analysis.model,
            derivation,
            broken: analysis.has_errors(),
            plausibility: Plausibility::default(),
            stale: &|| false,
            reuse: None,
            work: WorkBudget::new(sdeck_calculus::laws::LAW_WORK),
        }
    }

    /// The same context, taking the values of expectations over from earlier versions.
    pub fn with_reuse(mut self, reuse: &'a Reuse, keys: &'a ContentKeys) -> Self {
        self.reuse = Some((reuse, keys));
        self
    }

    /// The value of the figure an expectation pins
    /// ([`sdeck_calculus::expectation_value`]), taken over when an earlier version of the
    /// document computed it for the same content.
    pub fn expectation_value(&self, e: &Expectation) -> Result<f64, String> {
        let compute =
            || sdeck_calculus::expectation_value_within(self.model, self.derivation, e, &self.work);
        match self.reuse {
            Some((reuse, keys)) => reuse.expectation_value(keys.expectation(e), compute),
            None => compute(),
        }
    }

    /// The same context, giving up when `stale` answers yes.
    pub fn with_stale(mut self, stale: &'a (dyn Fn() -> bool + Sync)) -> Self {
        self.stale = stale;
        self
    }

    /// The same context with the project's thresholds for `implausible-value`.
    pub fn with_plausibility(mut self, plausibility: Plausibility) -> Self {
        self.plausibility = plausibility;
        self
    }
}

/// A rule's detection: appends what it finds to `out`.
type Runner = fn(&Context, &mut Vec<Diagnostic>);

/// The rules the registry runs, in order.
pub fn registered() -> impl Iterator<Item = RuleId> {
    REGISTRY.iter().filter_map(|(rule, run)| run.map(|_| *rule))
}

/// Every diagnostic of the registered rules; abandoned when the context turns stale.
pub fn run_all(cx: &Context) -> Result<Vec<Diagnostic>, crate::Abandoned> {
    let mut out = Vec::new();
    for run in REGISTRY.iter().filter_map(|(_, run)| *run) {
        if (cx.stale)() {
            return Err(crate::Abandoned);
        }
        run(cx, &mut out);
    }
    Ok(out)
}

#[cfg(test)]
mod tests;
