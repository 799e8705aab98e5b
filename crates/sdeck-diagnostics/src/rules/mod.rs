//! The catalogue: one file per rule, its text the manual (`sdeck explain`, docs/rules.md, hover).

use crate::Rule;
use serde::{Serialize, Serializer};
use std::fmt;

/// Declares the catalogue from one list: each line names a rule's identity, its module
/// and its constant. The list's order is the manual's order, the order of [`ALL`] and of
/// [`RuleId`], so that `ALL[id as usize]` is the rule of `id`.
macro_rules! catalogue {
    ($($variant:ident => $module:ident :: $constant:ident,)*) => {
        $(mod $module; pub use $module::$constant;)*

        /// The identity of a rule: what a diagnostic, a suppression comment and a project
        /// setting name. Compared, hashed and ordered as a value (the order is the
        /// catalogue's); its text is [`RuleId::name`].
        #[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
        pub enum RuleId {
            $($variant,)*
        }

        /// Every rule, in the order the manual lists them; indexed by [`RuleId`].
        pub static ALL: &[&Rule] = &[$(&$constant,)*];

        impl RuleId {
            /// Every identity, in catalogue order.
            pub const ALL: &'static [RuleId] = &[$(RuleId::$variant,)*];
        }
    };
}

catalogue! {
    Syntax => syntax::SYNTAX,
    UnknownName => unknown_name::UNKNOWN_NAME,
    DuplicateName => duplicate_name::DUPLICATE_NAME,
    MissingEquation => missing_equation::MISSING_EQUATION,
    NoFactor => no_factor::NO_FACTOR,
    DuplicateTerm => duplicate_term::DUPLICATE_TERM,
    DimensionMismatch => dimension_mismatch::DIMENSION_MISMATCH,
    BoundViolated => bound_violated::BOUND_VIOLATED,
    CorrelationRange => correlation_range::CORRELATION_RANGE,
    CorrelationNotPsd => correlation_not_psd::CORRELATION_NOT_PSD,
    FellerCondition => feller_condition::FELLER_CONDITION,
    FactorDomain => factor_domain::FACTOR_DOMAIN,
    NotMeanReverting => not_mean_reverting::NOT_MEAN_REVERTING,
    ImplausibleValue => implausible_value::IMPLAUSIBLE_VALUE,
    MomentExplosion => moment_explosion::MOMENT_EXPLOSION,
    DiscountMeasure => discount_measure::DISCOUNT_MEASURE,
    Unused => unused::UNUSED,
    UnitScale => unit_scale::UNIT_SCALE,
    ExpectationFailed => expectation_failed::EXPECTATION_FAILED,
    UnusedSuppression => unused_suppression::UNUSED_SUPPRESSION,
}

impl RuleId {
    /// The rule's entry in the catalogue.
    pub fn rule(self) -> &'static Rule {
        ALL[self as usize]
    }

    /// The kebab-case name shown in every output format.
    pub fn name(self) -> &'static str {
        self.rule().name
    }

    /// The position of the rule in the catalogue (SARIF's rule index).
    pub fn index(self) -> usize {
        self as usize
    }
}

impl fmt::Display for RuleId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl Serialize for RuleId {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.serialize_str(self.name())
    }
}

/// The rule called `name`, if there is one. Only text a user typed is looked up by name
/// (a suppression comment, a project setting, `sdeck explain NAME`).
pub fn by_name(name: &str) -> Option<&'static Rule> {
    ALL.iter().copied().find(|rule| rule.name == name)
}

/// The rule whose name is closest to a misspelt `name`, when one is close enough to be a
/// slip of the keyboard (edit distance at most 2, or a third of the name's length).
pub fn closest(name: &str) -> Option<&'static Rule> {
    crate::closest_word(name, ALL.iter().map(|rule| rule.name)).and_then(by_name)
}

#[cfg(test)]
mod tests {
    use super::{RuleId, ALL};

    /// The identity of each rule is its place in the catalogue, both ways.
    #[test]
    fn every_identity_indexes_its_own_rule() {
        assert_eq!(ALL.len(), RuleId::ALL.len());
        for (index, rule) in ALL.iter().enumerate() {
            assert_eq!(rule.id.index(), index, "{}", rule.name);
            assert_eq!(RuleId::ALL[index], rule.id, "{}", rule.name);
            assert_eq!(rule.id.name(), rule.name);
            assert_eq!(rule.id.to_string(), rule.name);
        }
        let names: std::collections::HashSet<&str> = ALL.iter().map(|r| r.name).collect();
        assert_eq!(names.len(), ALL.len(), "two rules share a name");
    }

    #[test]
    fn a_slip_finds_the_rule_and_a_stranger_finds_none() {
        assert_eq!(
            super::closest("feler-condition").map(|r| r.name),
            Some("feller-condition")
        );
        assert_eq!(
            super::closest("unused-supression").map(|r| r.name),
            Some("unused-suppression")
        );
        assert_eq!(super::closest("Unused").map(|r| r.name), Some("unused"));
        assert!(super::closest("volatility").is_none());
    }

    /// Every manual page has the same three sections, in order, each with text.
    #[test]
    fn every_explanation_has_the_three_sections_in_order() {
        for rule in super::ALL {
            let headings: Vec<&str> = rule
                .explanation
                .lines()
                .filter(|l| l.starts_with('#'))
                .collect();
            assert_eq!(
                headings,
                ["## Finds", "## Why a reviewer cares", "## How to mend"],
                "{}",
                rule.name
            );
            for section in rule.explanation.split("## ").skip(1) {
                let body = section.split_once('\n').map_or("", |(_, b)| b);
                assert!(!body.trim().is_empty(), "{}: empty section", rule.name);
            }
        }
    }
}
